//! `flowsift galaxy`: one object from the command line.

use anyhow::anyhow;

use flowsift::plan::galaxy::plan_galaxy;
use flowsift::run::galaxy::{galaxy_json, run_galaxy, ChainRedshift};

pub use flowsift::flags::galaxy::GalaxyArgs;

use super::table::{print_rows, row};

pub fn run(a: GalaxyArgs) -> anyhow::Result<()> {
    let plan = plan_galaxy(a.order().map_err(|e| anyhow!(e))?).map_err(|e| anyhow!(e))?;
    let report = run_galaxy(&plan).map_err(|e| anyhow!(e))?;
    if a.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&galaxy_json(&plan, &report))?
        );
        return Ok(());
    }
    let r = &report.result;
    let (z_helio, kind) = (plan.z_helio, plan.distance_kind);
    let frames = &plan.shared.frames;
    let length_unit = plan
        .shared
        .config
        .conventions
        .length_unit
        .unwrap_or_default();
    let has_errors = plan.has_errors();
    let notes = report.cautions.clone();
    let unit = length_unit.label();

    let f = |x: f64, p: usize| format!("{x:.p$}");
    let place = [
        row(
            "glon, glat",
            format!("{:.5}, {:.5}", r.glon, r.glat),
            "deg, Galactic",
        ),
        row(
            "sgl, sgb",
            format!("{:.5}, {:.5}", r.sgl, r.sgb),
            "deg, supergalactic",
        ),
    ];
    print_rows("flowsift galaxy", &place);
    println!();
    print_chain(z_helio, &report.chain, frames.method.name());
    println!();
    let mut rows = vec![
        row(
            "z_cos",
            f(r.z_cos, 7),
            &format!("from the {} under the cosmology", kind.name()),
        ),
        row("z_pec", f(r.z_pec, 7), "(1+z_cmb)/(1+z_cos) - 1"),
        row(
            "v_pec",
            f(r.v_pec, 1),
            "km/s, relativistic Doppler of z_pec",
        ),
    ];
    if has_errors {
        rows.push(row("v_pec_err", f(r.v_pec_err, 1), "km/s, first order"));
    }
    rows.extend([
        row(
            "d_c",
            f(r.d_c, 3),
            &format!("{unit}, comoving distance at z_cos"),
        ),
        row("eta", f(r.eta, 5), "log10(D_C(z_cmb)/D_C(z_cos))"),
        row(
            "v_pec_low_z",
            f(r.v_pec_low_z, 1),
            "km/s, cz - H0 d (comparison only)",
        ),
        row(
            "v_pec_watkins_feldman",
            f(r.v_pec_watkins_feldman, 1),
            "km/s, Watkins & Feldman 2015 (comparison only)",
        ),
    ]);
    if has_errors {
        rows.insert(
            rows.len() - 2,
            row("eta_err", f(r.eta_err, 5), "first order"),
        );
    }
    print_rows("Peculiar velocity", &rows);
    println!();
    for n in notes {
        println!("note: {n}");
    }
    Ok(())
}

/// One line per boost with the redshift after it, each apex's source below.
fn print_chain(z_helio: f64, chain: &[ChainRedshift], method: &str) {
    println!(
        "Boosts, Sun → CMB (velocity of each frame relative to the next, km/s, Galactic x, y, z):"
    );
    println!(
        "  {:<15} {:>57}  z = {z_helio:.7}  (input)",
        "heliocentric", ""
    );
    let last = chain.len().saturating_sub(1);
    for (k, c) in chain.iter().enumerate() {
        let s = &c.step;
        let dir = match (s.l_deg, s.b_deg) {
            (Some(l), Some(b)) => format!("l = {l:>7.3}°, b = {b:>7.3}°"),
            _ => "no motion".to_string(),
        };
        let [x, y, zc] = s.velocity_km_s.map(shown);
        let label = if k == last { "z_cmb" } else { "z" };
        println!(
            "  → {:<13} {:>7.2} km/s  {dir}  ({x:>7.2}, {y:>7.2}, {zc:>7.2})  {label} = {:.7}  cos θ = {:+.4}",
            s.to, s.speed_km_s, c.z, c.cos_theta
        );
        let whence = match &s.minus {
            Some(m) => format!("apex '{}' minus apex '{m}'", s.apex.name),
            None => format!("apex '{}'", s.apex.name),
        };
        println!("      {whence}: {}", s.apex.source);
        if let Some(file) = &s.apex.file {
            println!("      (from the apex file {file})");
        }
    }
    println!(
        "  Each boost is the difference of the Sun's velocities relative to two consecutive \
         frames (the apices); each redshift is the exact boost from the Sun's frame by that \
         frame's apex ({method} boost for the CMB)."
    );
}

/// A component for display: rounding noise below the printed precision shows as 0.
fn shown(x: f64) -> f64 {
    if x.abs() < 5e-3 {
        0.0
    } else {
        x
    }
}
