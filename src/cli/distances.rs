//! `flowsift distances`: FLRW distances at given redshifts.

use anyhow::anyhow;
use clap::Args;
use serde_json::json;

use flowsift::plan::Shared;
use flowsift::run::distances::distance_table;
use flowsift::settings::RunConfig;

use flowsift::settings::{ConventionChoice, LengthUnit};

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

pub fn run(a: DistancesArgs) -> anyhow::Result<()> {
    if a.z.is_empty() {
        return Err(anyhow!("give at least one redshift with --z"));
    }
    let conventions = ConventionChoice {
        length_unit: a.length_unit.map(|u| match u {
            LengthUnitArg::Mpc => LengthUnit::Mpc,
            LengthUnitArg::MpcOverH => LengthUnit::MpcOverH,
        }),
        ..Default::default()
    };
    let shared = Shared::resolve(
        None,
        None,
        &RunConfig {
            cosmology: a.cosmology.choice(),
            conventions,
            ..Default::default()
        },
        false,
    )
    .map_err(|e| anyhow!(e))?;
    let rows = distance_table(&a.z, &shared).map_err(|e| anyhow!(e))?;
    if a.json {
        let arr: Vec<_> = rows
            .iter()
            .map(|d| {
                json!({"z": d.z, "d_c": d.d_c, "d_m": d.d_m, "d_l": d.d_l, "d_a": d.d_a, "mu": d.mu})
            })
            .collect();
        println!("{}", serde_json::to_string_pretty(&arr)?);
        return Ok(());
    }
    let u = conventions.length_unit.unwrap_or_default().label();
    println!(
        "{:>10}  {:>14}  {:>14}  {:>14}  {:>14}  {:>9}",
        "z",
        format!("D_C [{u}]"),
        format!("D_M [{u}]"),
        format!("D_L [{u}]"),
        format!("D_A [{u}]"),
        "mu [mag]"
    );
    for d in rows {
        println!(
            "{:>10}  {:>14.4}  {:>14.4}  {:>14.4}  {:>14.4}  {:>9.4}",
            d.z, d.d_c, d.d_m, d.d_l, d.d_a, d.mu
        );
    }
    println!(
        "note: {} (Ω_k = {}); μ uses D_L in Mpc whatever the length unit.",
        shared.cosmology.source,
        flowsift::settings::short_number(shared.cosmology.omega_k)
    );
    Ok(())
}
