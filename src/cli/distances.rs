//! `flowsift distances`: FLRW distances at given redshifts.

use anyhow::anyhow;

use flowsift::run::distances::{distance_table, distances_json};

pub use flowsift::flags::distances::DistancesArgs;

pub fn run(a: DistancesArgs) -> anyhow::Result<()> {
    let shared = a.shared().map_err(|e| anyhow!(e))?;
    let rows = distance_table(&a.z, &shared).map_err(|e| anyhow!(e))?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&distances_json(&rows))?);
        return Ok(());
    }
    let u = shared
        .config
        .conventions
        .length_unit
        .unwrap_or_default()
        .label();
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
