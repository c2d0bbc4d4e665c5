//! `flowsift frames`: what apices and presets exist, with sources.

use clap::Args;

use flowsift::settings::{apex_table, PRESETS};

/// List apices and cosmology presets.
#[derive(Debug, Args)]
pub struct FramesArgs {
    /// Print JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: FramesArgs) -> anyhow::Result<()> {
    let apices = apex_table();
    if a.json {
        let presets: Vec<_> = PRESETS
            .iter()
            .map(|p| serde_json::json!({"name": p.name, "params": p.params, "source": p.source}))
            .collect();
        println!(
            "{}",
            serde_json::to_string_pretty(
                &serde_json::json!({"apices": apices, "cosmology_presets": presets})
            )?
        );
        return Ok(());
    }
    println!("Apices (the Sun's velocity relative to each frame; the first of each frame is its default):");
    for x in &apices {
        println!(
            "  {:<13} {:<26} {:>7.2} km/s  l = {:>8.3}°  b = {:>7.3}°",
            x.frame, x.name, x.speed_km_s, x.glon_deg, x.glat_deg
        );
        println!("  {:<13} {}", "", x.source);
    }
    println!("\nCosmology presets:");
    for p in PRESETS {
        println!("  {:<11} {}", p.name, p.source);
    }
    Ok(())
}
