//! The flags of `flowsift distances`, for the command line and the Python package.

use clap::Args;

use crate::plan::{PlanError, Shared};
use crate::settings::{ConventionChoice, LengthUnit, RunConfig};

use super::options::{CosmologyFlags, LengthUnitArg};

/// Distances at a list of redshifts.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  flowsift distances --z 0.01,0.1,1 --omega-m 0.31 --json")]
pub struct DistancesArgs {
    /// Redshifts, comma-separated.
    #[arg(
        long,
        value_name = "Z1,Z2,…",
        value_delimiter = ',',
        allow_negative_numbers = true,
        required = true
    )]
    pub z: Vec<f64>,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    /// Unit of the distances printed: mpc (default) or mpc-over-h (h⁻¹ Mpc). (The
    /// luminosity-distance conventions concern peculiar velocities, not these FLRW
    /// distances, so `distances` has none.)
    #[arg(long = "length-unit", value_enum, value_name = "UNIT")]
    pub length_unit: Option<LengthUnitArg>,
    /// Print a JSON array instead of a table.
    #[arg(long)]
    pub json: bool,
}

impl DistancesArgs {
    /// The cosmology and length unit these flags ask for, resolved.
    pub fn shared(&self) -> Result<Shared, PlanError> {
        if self.z.is_empty() {
            return Err("give at least one redshift with --z".into());
        }
        let conventions = ConventionChoice {
            length_unit: self.length_unit.map(|u| match u {
                LengthUnitArg::Mpc => LengthUnit::Mpc,
                LengthUnitArg::MpcOverH => LengthUnit::MpcOverH,
            }),
            ..Default::default()
        };
        Shared::resolve(
            None,
            None,
            &RunConfig {
                cosmology: self.cosmology.choice(),
                conventions,
                ..Default::default()
            },
            false,
        )
    }
}
