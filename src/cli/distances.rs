//! `flowsift distances`: FLRW distances at given redshifts.

use anyhow::anyhow;
use clap::Args;
use serde_json::json;

use super::options::{ConventionFlags, CosmologyFlags};

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
    #[command(flatten)]
    pub conventions: ConventionFlags,
    /// Print a JSON array instead of a table.
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: DistancesArgs) -> anyhow::Result<()> {
    let zs: Vec<f64> = a.z.clone();
    if zs.is_empty() {
        return Err(anyhow!("give at least one redshift with --z"));
    }
    for &z in &zs {
        if !z.is_finite() {
            return Err(anyhow!("--z: {z} is not a finite redshift"));
        }
        if z <= -1.0 {
            return Err(anyhow!(
                "--z: redshift {z} is not above -1 (1 + z must be positive)"
            ));
        }
        if z < 0.0 {
            return Err(anyhow!(
                "--z: negative redshift {z} has no distance in an expanding model"
            ));
        }
    }
    let resolved = a.cosmology.choice().resolve().map_err(|e| anyhow!(e))?;
    let z_max = zs.iter().cloned().fold(0.0, f64::max);
    let cosmology = if z_max > flowsift::physics::cosmology::DEFAULT_Z_MAX {
        flowsift::physics::cosmology::Cosmology::with_z_max(resolved.params, z_max * 1.01)
            .map_err(|e| anyhow!("{e}"))?
    } else {
        resolved.build(z_max).map_err(|e| anyhow!(e))?
    };
    cosmology.ensure_covers(z_max).map_err(|e| anyhow!("{e}"))?;
    let unit = a.conventions.choice().length_unit.unwrap_or_default();
    let k = unit.from_mpc_factor(&resolved.params);
    let rows: Vec<_> = zs
        .iter()
        .map(|&z| cosmology.distances(z).map_err(|e| anyhow!("z = {z}: {e}")))
        .collect::<Result<_, _>>()?;
    if a.json {
        let arr: Vec<_> = rows
            .iter()
            .map(|d| {
                json!({"z": d.z, "d_c": d.d_c * k, "d_m": d.d_m * k, "d_l": d.d_l * k, "d_a": d.d_a * k, "mu": d.mu})
            })
            .collect();
        println!("{}", serde_json::to_string_pretty(&arr)?);
        return Ok(());
    }
    let u = unit.label();
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
            d.z,
            d.d_c * k,
            d.d_m * k,
            d.d_l * k,
            d.d_a * k,
            d.mu
        );
    }
    println!(
        "note: {} (Ω_k = {:.3e}); μ uses D_L in Mpc whatever the length unit.",
        resolved.source, resolved.omega_k
    );
    Ok(())
}
