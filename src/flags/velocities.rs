//! The flags of `flowsift velocities` that say how a catalogue is turned into velocities
//! (everything but the files): one parser for the command line and the Python package, so
//! both reach the one plan with the same settings and the same messages.

use std::path::PathBuf;

use clap::Args;

use crate::settings::{
    BulkFlowChoice, ErrorChoice, ExportChoice, GroupChoice, InputChoice, MalmquistChoice,
    OutlierChoice, RunConfig,
};

use super::options::{
    BulkFlowFlags, ConventionFlags, CosmologyFlags, DistanceFlags, FrameFlags, OutlierFlags,
    SkyRedshiftFlags,
};

/// How to derive the velocities of a catalogue: columns, cosmology, frames, conventions,
/// errors and sample stages.
#[derive(Debug, Clone, Args)]
pub struct VelocityFlags {
    /// Run file (TOML) with any of the settings below; flags override it.
    #[arg(long, value_name = "RUN.toml")]
    pub config: Option<PathBuf>,
    #[command(flatten)]
    pub columns: SkyRedshiftFlags,
    #[command(flatten)]
    pub distance_columns: DistanceFlags,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    #[command(flatten)]
    pub frame: FrameFlags,
    #[command(flatten)]
    pub conventions: ConventionFlags,
    /// Monte Carlo draws per object; adds v_pec_mc_median, v_pec_mc_p16, v_pec_mc_p84.
    #[arg(
        long = "monte-carlo",
        value_name = "N",
        help_heading = "Errors",
        allow_negative_numbers = true
    )]
    pub monte_carlo: Option<usize>,
    /// Seed of the Monte Carlo draws (same seed, same output, any thread count).
    #[arg(
        long,
        value_name = "S",
        help_heading = "Errors",
        allow_negative_numbers = true
    )]
    pub seed: Option<u64>,
    /// Add v_pec_wf and v_pec_wf_err: the estimator of Watkins & Feldman (2015), for comparison
    /// with the exact v_pec.
    #[arg(long = "watkins-feldman", help_heading = "Errors")]
    pub watkins_feldman: bool,
    /// Correct distances for homogeneous Malmquist bias before deriving velocities.
    #[arg(long, help_heading = "Sample stages")]
    pub malmquist: bool,
    /// Correct for Malmquist bias with this radial density profile (table with columns r, n).
    #[arg(
        long = "malmquist-profile",
        value_name = "FILE",
        help_heading = "Sample stages"
    )]
    pub malmquist_profile: Option<String>,
    /// Combine members sharing a group identifier; the group table goes next to the output.
    #[arg(long, help_heading = "Sample stages")]
    pub groups: bool,
    /// Column marking each group's central member (implies --groups).
    #[arg(
        long = "central-column",
        value_name = "NAME",
        help_heading = "Sample stages"
    )]
    pub central_column: Option<String>,
    /// Where to write the group table (implies --groups).
    #[arg(
        long = "groups-out",
        value_name = "FILE",
        help_heading = "Sample stages"
    )]
    pub groups_out: Option<String>,
    /// Flag outliers (on the groups when grouping).
    #[arg(long, help_heading = "Sample stages")]
    pub outliers: bool,
    #[command(flatten)]
    pub outlier_flags: OutlierFlags,
    /// Fit the bulk flow and write OUTPUT.bulkflow.json.
    #[arg(long = "bulk-flow", help_heading = "Sample stages")]
    pub bulk_flow: bool,
    #[command(flatten)]
    pub bulk_flow_flags: BulkFlowFlags,
    /// Write the flow-sample export to this file.
    #[arg(long, value_name = "FILE", help_heading = "Sample stages")]
    pub export: Option<String>,
    /// Use flags or run-file keys that contradict the settings recorded with a flowsift
    /// input (cosmology, rest frame, conventions, columns); the output records both.
    #[arg(long = "override-input-settings")]
    pub override_input_settings: bool,
}

impl VelocityFlags {
    /// The flags as a run configuration (sections present only where a flag asks for them).
    pub fn flags_config(&self, hdu: Option<String>) -> RunConfig {
        let outlier_choice = self.outlier_flags.choice();
        let bulk_choice = self.bulk_flow_flags.choice();
        RunConfig {
            input: InputChoice { hdu },
            columns: self.distance_columns.add_to(self.columns.choice()),
            cosmology: self.cosmology.choice(),
            frame: self.frame.choice(),
            conventions: self.conventions.choice(),
            errors: ErrorChoice {
                monte_carlo: self.monte_carlo,
                seed: self.seed,
            },
            comparisons: crate::settings::ComparisonChoice {
                watkins_feldman: self.watkins_feldman.then_some(true),
            },
            malmquist: (self.malmquist || self.malmquist_profile.is_some()).then(|| {
                MalmquistChoice {
                    method: None,
                    profile: self.malmquist_profile.clone(),
                }
            }),
            groups: (self.groups || self.central_column.is_some() || self.groups_out.is_some())
                .then(|| GroupChoice {
                    central_column: self.central_column.clone(),
                    output: self.groups_out.clone(),
                }),
            outliers: (self.outliers || outlier_choice != OutlierChoice::default())
                .then_some(outlier_choice),
            bulk_flow: (self.bulk_flow || bulk_choice != BulkFlowChoice::default())
                .then_some(bulk_choice),
            export: self.export.clone().map(|o| ExportChoice {
                output: Some(o),
                keep_outliers: None,
            }),
        }
    }
}
