//! From raw choices (run file and flags, merged, flags winning) to a validated run plan:
//! cosmology built, apex chosen, columns and units resolved against the file's header.
//! Every conflict is reported at once; the pipeline takes only the plan.

pub mod columns;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

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
                if t.starts_with("# ") && t[2..].contains(" = ") && !t[2..].starts_with("Column") {
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
    }

    #[test]
    fn unknown_keys_are_errors() {
        let e = RunConfig::from_toml("[cosmology]\nhubble = 70\n", "run.toml").unwrap_err();
        assert!(e.contains("run.toml") && e.contains("hubble"), "{e}");
    }
}
