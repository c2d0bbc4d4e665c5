//! Every choice a user makes, from flags or a run file, in one place: plain data with
//! `overlay` (flags over file) and, for cosmology and frames, the resolution into validated
//! physics objects. Nothing here reads files; `plan` resolves these against the inputs.

mod apex_file;
mod columns;
mod conventions;
mod cosmology;
mod error;
mod example;
mod frames;
mod model;
mod number_text;
mod stages;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

/// The physics' own names for what a user chooses (the vocabulary of flags and run files).
pub use crate::physics::cosmology::LengthUnit;
/// What there is to choose from: the named apices and cosmology presets, with sources.
pub use crate::physics::cosmology::PRESETS;
pub use crate::physics::estimators::{DistanceKind, DlConvention};
pub use crate::physics::field::{DensityBoundary, FieldAxes};
pub use crate::physics::restframe::BoostMethod;
pub use crate::physics::restframe::GivenFrame;
pub use crate::physics::restframe::{apex_table, chain_sum, cmb_dipoles, Apex, ChainStep};
pub use crate::physics::sky::InputSkyFrame;
pub use apex_file::{parse_apex_file, ApexEntry};
pub use columns::{AngleUnit, ColumnChoice, RedshiftUnit};
pub use conventions::{cautions, ConventionChoice};
pub use cosmology::{CosmologyChoice, ResolvedCosmology};
pub use error::SettingsError;
pub use example::EXAMPLE_CONFIG;
pub use frames::{FrameChoice, ResolvedFrames};
pub use model::{InfallChoice, ModelChoice, DEFAULT_SIGMA_V_KM_S};
pub use number_text::short_number;
pub use stages::{
    BulkFlowChoice, ExportChoice, FitSpace, GroupChoice, MalmquistChoice, MalmquistMethod,
    OutlierChoice,
};

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

/// Comparison columns beside the exact estimate (run file `[comparisons]`).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ComparisonChoice {
    /// Add `v_pec_wf` and `v_pec_wf_err`, the estimator of Watkins & Feldman (2015), for
    /// comparison with the exact v_pec (default false).
    pub watkins_feldman: Option<bool>,
}

impl ComparisonChoice {
    pub fn overlay(&self, other: &ComparisonChoice) -> ComparisonChoice {
        ComparisonChoice {
            watkins_feldman: other.watkins_feldman.or(self.watkins_feldman),
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
    #[serde(default)]
    pub comparisons: ComparisonChoice,
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
    pub fn from_toml(text: &str, origin: &str) -> Result<RunConfig, SettingsError> {
        toml::from_str(text).map_err(|e| SettingsError::RunFile {
            origin: origin.to_string(),
            message: e.to_string(),
        })
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
            comparisons: self.comparisons.overlay(&flags.comparisons),
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
