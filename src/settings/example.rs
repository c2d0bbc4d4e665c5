//! The commented example run file (`flowsift config --example`).

/// A commented example run file (`flowsift config --example`).
pub const EXAMPLE_CONFIG: &str = r#"# flowsift run file. Every key is optional; command-line flags override it.
# Check a file against schemas/run-config.schema.json, or just run with it.

[input]
# hdu = "CATALOG"            # FITS extension by EXTNAME or index; default: first table

[columns]
# Column names in your file (defaults: ra, dec, z_helio or cz_helio, one of mu/dl/dc/eta,
# <distance>_err, z_err, group_id). FITS TUCD/TUNIT are used when these are not given.
# ra = "RAJ2000"
# dec = "DEJ2000"
# z = "cz"
# z_unit = "cz"              # "z" or "cz" (km/s)
# z_err = "e_cz"
# distance = "DM"
# distance_kind = "mu"       # "mu" (mag), "dl", "dc" or "da" (Mpc or Mpc/h), "eta"
# distance_err = "e_DM"
# group_id = "group"
# angle_unit = "deg"         # "deg", "rad" or "sexagesimal"

[cosmology]
# preset = "concordance"     # "concordance" (flat LCDM, H0 = 70, Om = 0.3) or "planck2018"
# h0 = 70.0
# omega_m = 0.3
# omega_de = 0.7             # omit for a flat model
# omega_r = 0.0
# w0 = -1.0
# wa = 0.0

[frame]
# dipole = "planck2018"      # or "planck2013", "cobe-firas"
# apex = [369.82, 264.021, 48.253]   # your own: km/s, Galactic l, b (deg)
# boost = "exact"            # or "legacy-additive" (cz + v cos(theta))
# local_group = "courteau-vandenbergh1999"
# galactic_rest = "schoenrich2010-eilers2019"
# lsr = "schoenrich2010"
# apex_file = "apices.toml"  # your own apices ([[apex]] tables), beside this file;
#                            # choose them by name above (see demo-data/apices.example.toml)

[conventions]
# dl_convention = "full"     # or "observed", "cosmological"
# length_unit = "mpc"        # or "mpc-over-h"
# sigma_star = 250.0         # km/s, added in quadrature to velocity errors

[errors]
# monte_carlo = 1000         # draws per object; percentiles of v_pec are added
# seed = 1

[comparisons]
# watkins_feldman = false    # add v_pec_wf, v_pec_wf_err (Watkins & Feldman 2015)

# Sample stages: each runs when its section is present (uncomment the [header]).
# [malmquist]
# method = "homogeneous"     # or "profile" with a density table:
# profile = "density.csv"    # columns r (Mpc) and n

# [groups]
# central_column = "is_central"   # a member whose redshift is the group's
# output = "groups.fits"          # default: <output stem>.groups.<ext>

# [outliers]
# threshold = 3.5            # residual about the bulk flow, in sigma
# neighbours = 10            # k nearest neighbours (0: off)
# neighbour_threshold = 3.5
# max_speed = 5000.0         # km/s; default: no bound
# eta_range = [-0.6, 0.6]
# quantity = "eta"           # or "velocity"
# sigma_star = 250.0         # km/s; default: fitted

# [bulk_flow]
# quantity = "eta"           # or "velocity"
# sigma_star = 250.0         # km/s; default: fitted
# include_outliers = false  # as --include-outliers
# lcdm = true                # expectation for the sample's window
# sigma8 = 0.8102
# omega_b = 0.049
# n_s = 0.9665

# [export]
# output = "flow.parquet"    # default: <output stem>.flow.<ext>
# keep_outliers = false
"#;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::settings::RunConfig;

    /// The shipped example must parse (all keys commented) and so must its uncommented form.
    #[test]
    fn example_parses_commented_and_uncommented() {
        RunConfig::from_toml(EXAMPLE_CONFIG, "example").unwrap();
        let uncommented: String = EXAMPLE_CONFIG
            .lines()
            .map(|l| {
                let t = l.trim_start();
                if t.starts_with("# [") {
                    t[2..].to_string()
                } else if t.starts_with("# ")
                    && t[2..].contains(" = ")
                    && !t[2..].starts_with("Column")
                {
                    // Keep only the assignment part before a trailing comment.
                    let body = &t[2..];
                    match body.find("  #") {
                        Some(i) => body[..i].to_string(),
                        None => body.to_string(),
                    }
                } else {
                    l.to_string()
                }
            })
            .collect::<Vec<_>>()
            .join("\n");
        let c = RunConfig::from_toml(&uncommented, "example")
            .unwrap_or_else(|e| panic!("{e}\n{uncommented}"));
        assert_eq!(c.columns.ra.as_deref(), Some("RAJ2000"));
        assert_eq!(c.errors.monte_carlo, Some(1000));
        assert_eq!(c.frame.apex, Some([369.82, 264.021, 48.253]));
        assert!(c.malmquist.is_some() && c.groups.is_some() && c.outliers.is_some());
        assert_eq!(c.bulk_flow.as_ref().and_then(|b| b.sigma8), Some(0.8102));
        assert_eq!(c.export.and_then(|e| e.keep_outliers), Some(false));
    }

    #[test]
    fn unknown_keys_are_errors() {
        let e = RunConfig::from_toml("[cosmology]\nhubble = 70\n", "run.toml").unwrap_err();
        assert!(
            matches!(&e, crate::settings::SettingsError::RunFile { origin, .. } if origin == "run.toml"),
            "{e:?}"
        );
        let e = e.to_string();
        assert!(e.starts_with("run.toml: ") && e.contains("hubble"), "{e}");
    }
}
