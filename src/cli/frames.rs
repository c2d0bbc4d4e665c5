//! `flowsift frames`: the chain of boosts Sun → LSR → Galactic rest → Local Group → CMB for
//! the chosen apices (each step's velocity and source), the CMB dipole measurements, the
//! apices of an apex file, and the cosmology presets.

use anyhow::anyhow;
use clap::Args;
use serde_json::json;

use flowsift::plan::Shared;
use flowsift::settings::{chain_sum, cmb_dipoles, Apex, ChainStep, RunConfig, PRESETS};

use flowsift::flags::options::FrameFlags;

/// Show the chain of boosts between rest frames, the apices to choose from, and the cosmology
/// presets.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  flowsift frames\n  flowsift frames --apex-file demo-data/apices.example.toml --local-group yahil1977 --json"
)]
pub struct FramesArgs {
    #[command(flatten)]
    pub frame: FrameFlags,
    /// Print JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: FramesArgs) -> anyhow::Result<()> {
    let cfg = RunConfig {
        frame: a.frame.choice(),
        ..Default::default()
    };
    let shared = Shared::resolve(None, None, &cfg, false).map_err(|e| anyhow!(e))?;
    let frames = &shared.frames;
    let chain = frames.chain();
    let sum = chain_sum(&chain);
    let dipoles = cmb_dipoles();
    let apex_file = shared.config.frame.apex_file.clone();
    let own = &frames.own_apices;
    if a.json {
        let presets: Vec<_> = PRESETS
            .iter()
            .map(|p| json!({"name": p.name, "params": p.params, "source": p.source}))
            .collect();
        let own: Vec<_> = own
            .iter()
            .map(|x| json!({"apex": x, "velocity_km_s": x.velocity_galactic()}))
            .collect();
        let out = json!({
            "chain": chain,
            "chain_sum_km_s": sum,
            "boost": frames.method.name(),
            "cmb_dipoles": dipoles,
            "apex_file": apex_file,
            "apex_file_apices": own,
            "cosmology_presets": presets,
        });
        println!("{}", serde_json::to_string_pretty(&out)?);
        return Ok(());
    }
    println!("Chain of boosts, Sun → LSR → Galactic rest → Local Group → CMB");
    println!(
        "(each step: the velocity of one frame relative to the next, the Sun's apex of the \
         next frame minus that of the previous; Galactic x → l = 0°, y → l = 90°, z → NGP)"
    );
    for s in &chain {
        print_step(s);
    }
    let speed = (sum[0] * sum[0] + sum[1] * sum[1] + sum[2] * sum[2]).sqrt();
    println!(
        "  sum of the steps: ({:.2}, {:.2}, {:.2}) km/s, {speed:.2} km/s: the Sun's velocity \
         relative to the CMB ('{}' apex)",
        sum[0], sum[1], sum[2], frames.cmb_apex.name
    );
    println!("\nCMB dipole measurements (choose with --dipole; the first is the default):");
    for d in dipoles
        .iter()
        .chain(own.iter().filter(|x| x.frame == "cmb"))
    {
        print_apex(d);
    }
    if let Some(path) = &apex_file {
        println!("\nApices of the apex file {path} (choose by name with --dipole, --local-group, --galactic-rest, --lsr):");
        for x in own
            .iter()
            .filter(|x| x.file.as_deref() == Some(path.as_str()))
        {
            print_apex(x);
        }
    } else {
        println!(
            "\nOther published apices can be given in an apex file of your own (--apex-file; see \
             demo-data/apices.example.toml) and chosen by name."
        );
    }
    println!("\nCosmology presets:");
    for p in PRESETS {
        println!("  {:<11} {}", p.name, p.source);
    }
    Ok(())
}

fn print_step(s: &ChainStep) {
    let [x, y, z] = s.velocity_km_s.map(shown);
    let dir = match (s.l_deg, s.b_deg) {
        (Some(l), Some(b)) => format!("towards l = {l:>8.3}°, b = {b:>7.3}°"),
        _ => "(no motion)".to_string(),
    };
    println!(
        "  {:<13} → {:<13} {:>7.2} km/s {dir}   ({x:>8.2}, {y:>8.2}, {z:>8.2}) km/s",
        s.from, s.to, s.speed_km_s
    );
    let whence = match &s.minus {
        Some(m) => format!("apex '{}' minus apex '{m}'", s.apex.name),
        None => format!("apex '{}'", s.apex.name),
    };
    println!("      = {whence}; '{}' from {}", s.apex.name, s.apex.source);
    if let Some(f) = &s.apex.file {
        println!("      ('{}' from the apex file {f})", s.apex.name);
    }
}

fn print_apex(x: &Apex) {
    let [vx, vy, vz] = x.velocity_galactic().map(shown);
    println!(
        "  {:<13} {:<26} {:>7.2} km/s  l = {:>8.3}°  b = {:>7.3}°  ({vx:.2}, {vy:.2}, {vz:.2})",
        x.frame, x.name, x.speed_km_s, x.glon_deg, x.glat_deg
    );
    println!("  {:<13} {}", "", x.source);
}

/// A component for display: rounding noise below the printed precision shows as 0.
fn shown(x: f64) -> f64 {
    if x.abs() < 5e-3 {
        0.0
    } else {
        x
    }
}
