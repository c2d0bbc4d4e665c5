//! From raw choices (run file and flags, merged, flags winning) to a validated run plan:
//! cosmology built, apex chosen, columns and units resolved against the file's header.
//! Every conflict is reported at once; the pipeline takes only the plan.

pub mod columns;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::flow::bulk::BulkFlowChoice;
use crate::flow::groups::GroupChoice;
use crate::flow::outliers::OutlierChoice;
use crate::settings::{ConventionChoice, CosmologyChoice, FrameChoice};
pub use columns::{AngleUnit, ColumnChoice, ColumnPlan, RedshiftUnit};

/// Error-propagation choices.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ErrorChoice {
    /// Monte Carlo draws per object (0 or absent: analytic errors only).
    pub monte_carlo: Option<usize>,
    /// Seed of the Monte Carlo draws (default 1).
    pub seed: Option<u64>,
}

impl ErrorChoice {
    pub fn overlay(&self, other: &ErrorChoice) -> ErrorChoice {
        ErrorChoice {
            monte_carlo: other.monte_carlo.or(self.monte_carlo),
            seed: other.seed.or(self.seed),
        }
    }
}

/// Input-file choices.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct InputChoice {
    /// FITS HDU to read, by EXTNAME or index (default: the first binary table).
    pub hdu: Option<String>,
}

impl InputChoice {
    pub fn overlay(&self, other: &InputChoice) -> InputChoice {
        InputChoice {
            hdu: other.hdu.clone().or_else(|| self.hdu.clone()),
        }
    }
}

/// Which Malmquist correction to apply to the distances before the velocities.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum MalmquistMethod {
    /// E[r|d] = d exp(3.5 Δ²) (Lynden-Bell et al. 1988).
    #[default]
    Homogeneous,
    /// The general form with a radial density profile n(r) from `profile`.
    Profile,
}

/// Malmquist settings (run file `[malmquist]`, or flags).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct MalmquistChoice {
    /// homogeneous (default) or profile.
    pub method: Option<MalmquistMethod>,
    /// CSV/TSV/Parquet/FITS table with columns `r` (Mpc, or the run's length unit) and `n`
    /// (any normalisation); implies method = profile.
    pub profile: Option<String>,
}

impl MalmquistChoice {
    pub fn overlay(&self, o: &MalmquistChoice) -> MalmquistChoice {
        MalmquistChoice {
            method: o.method.or(self.method),
            profile: o.profile.clone().or_else(|| self.profile.clone()),
        }
    }
}

/// Flow-sample export settings (run file `[export]`, or flags).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ExportChoice {
    /// Where to write it (default: `<output stem>.flow.<ext>`).
    pub output: Option<String>,
    /// Keep rows flagged as outliers (default false; they carry `outlier = true`).
    pub keep_outliers: Option<bool>,
}

impl ExportChoice {
    pub fn overlay(&self, o: &ExportChoice) -> ExportChoice {
        ExportChoice {
            output: o.output.clone().or_else(|| self.output.clone()),
            keep_outliers: o.keep_outliers.or(self.keep_outliers),
        }
    }
}

/// Merge optional sections: present in either means present.
fn overlay_section<T: Clone>(a: &Option<T>, b: &Option<T>, f: impl Fn(&T, &T) -> T) -> Option<T> {
    match (a, b) {
        (Some(x), Some(y)) => Some(f(x, y)),
        (Some(x), None) => Some(x.clone()),
        (None, y) => y.clone(),
    }
}

/// A run file (TOML): every flag of `flowsift velocities` has its place here.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RunConfig {
    #[serde(default)]
    pub input: InputChoice,
    #[serde(default)]
    pub columns: ColumnChoice,
    #[serde(default)]
    pub cosmology: CosmologyChoice,
    #[serde(default)]
    pub frame: FrameChoice,
    #[serde(default)]
    pub conventions: ConventionChoice,
    #[serde(default)]
    pub errors: ErrorChoice,
    /// Present: correct distances for Malmquist bias before deriving velocities.
    pub malmquist: Option<MalmquistChoice>,
    /// Present: combine members sharing a group identifier.
    pub groups: Option<GroupChoice>,
    /// Present: flag outliers (on the groups when groups are on).
    pub outliers: Option<OutlierChoice>,
    /// Present: fit the bulk flow and write it as JSON next to the output.
    pub bulk_flow: Option<BulkFlowChoice>,
    /// Present: write the flow-sample export.
    pub export: Option<ExportChoice>,
}

impl RunConfig {
    /// Parse a run file's text; `origin` names it in messages.
    pub fn from_toml(text: &str, origin: &str) -> Result<RunConfig, String> {
        toml::from_str(text).map_err(|e| format!("{origin}: {e}"))
    }

    /// This file's choices with `flags` on top.
    pub fn overlay(&self, flags: &RunConfig) -> RunConfig {
        RunConfig {
            input: self.input.overlay(&flags.input),
            columns: self.columns.overlay(&flags.columns),
            cosmology: self.cosmology.overlay(&flags.cosmology),
            frame: self.frame.overlay(&flags.frame),
            conventions: self.conventions.overlay(&flags.conventions),
            errors: self.errors.overlay(&flags.errors),
            malmquist: overlay_section(&self.malmquist, &flags.malmquist, MalmquistChoice::overlay),
            groups: overlay_section(&self.groups, &flags.groups, GroupChoice::overlay),
            outliers: overlay_section(&self.outliers, &flags.outliers, OutlierChoice::overlay),
            bulk_flow: overlay_section(&self.bulk_flow, &flags.bulk_flow, BulkFlowChoice::overlay),
            export: overlay_section(&self.export, &flags.export, ExportChoice::overlay),
        }
    }

    /// The JSON Schema of the run file, generated from these types.
    pub fn json_schema() -> String {
        let schema = schemars::schema_for!(RunConfig);
        let mut s = serde_json::to_string_pretty(&schema).expect("schema serialises");
        s.push('\n');
        s
    }
}

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
# distance_kind = "mu"       # "mu" (mag), "dl" or "dc" (Mpc or Mpc/h), "eta"
# distance_err = "e_DM"
# group_id = "group"
# angle_unit = "deg"         # "deg", "rad" or "sexagesimal"

[cosmology]
# preset = "common"          # "common" (flat LCDM, H0 = 70, Om = 0.3) or "planck2018"
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

[conventions]
# dl_convention = "observed" # or "cosmological", "full"
# length_unit = "mpc"        # or "mpc-over-h"
# sigma_star = 250.0         # km/s, added in quadrature to velocity errors

[errors]
# monte_carlo = 1000         # draws per object; percentiles of v_pec are added
# seed = 1

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
# space = "eta"              # or "velocity"
# sigma_star = 250.0         # km/s; default: fitted

# [bulk_flow]
# space = "eta"              # or "velocity"
# sigma_star = 250.0         # km/s; default: fitted
# skip_outliers = true
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
        assert!(e.contains("run.toml") && e.contains("hubble"), "{e}");
    }
}
