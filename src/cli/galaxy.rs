//! `flowsift galaxy`: one object from the command line.

use anyhow::anyhow;
use clap::Args;
use serde_json::json;

use flowsift::plan::galaxy::{plan_galaxy, GalaxyOrder};
use flowsift::run::galaxy::{run_galaxy, ChainRedshift};
use flowsift::settings::{DistanceKind, RunConfig};

use super::options::{ConventionFlags, CosmologyFlags, FrameFlags};
use super::table::{print_rows, row};

/// One galaxy: position, heliocentric redshift and exactly one distance.
#[derive(Debug, Args)]
#[command(group(clap::ArgGroup::new("distance").required(true).multiple(false)))]
#[command(
    after_help = "Example:\n  flowsift galaxy --ra 150.1 --dec 2.2 --z-helio 0.0231 --mu 34.85 --mu-err 0.4 --json"
)]
pub struct GalaxyArgs {
    /// Right ascension (ICRS): degrees, or sexagesimal hours like 10:00:24.0.
    #[arg(long, allow_hyphen_values = true)]
    pub ra: String,
    /// Declination (ICRS): degrees, or sexagesimal like -02:12:00.0.
    #[arg(long, allow_hyphen_values = true)]
    pub dec: String,
    /// Heliocentric redshift.
    #[arg(
        long = "z-helio",
        value_name = "Z",
        allow_negative_numbers = true,
        required_unless_present = "cz_helio",
        conflicts_with = "cz_helio"
    )]
    pub z_helio: Option<f64>,
    /// Heliocentric recession velocity c·z, km/s (instead of --z-helio).
    #[arg(long = "cz-helio", value_name = "KM_S", allow_negative_numbers = true)]
    pub cz_helio: Option<f64>,
    /// 1σ error of the heliocentric redshift.
    #[arg(long = "z-err", value_name = "Z", allow_negative_numbers = true)]
    pub z_err: Option<f64>,
    /// Distance modulus μ, mag.
    #[arg(
        long,
        value_name = "MAG",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub mu: Option<f64>,
    /// Luminosity distance (Mpc, or h⁻¹ Mpc with --length-unit mpc-over-h).
    #[arg(
        long,
        value_name = "MPC",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub dl: Option<f64>,
    /// Line-of-sight comoving distance (Mpc, or h⁻¹ Mpc).
    #[arg(
        long,
        value_name = "MPC",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub dc: Option<f64>,
    /// Angular-diameter distance (Mpc, or h⁻¹ Mpc), e.g. from a size-based indicator.
    #[arg(
        long,
        value_name = "MPC",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub da: Option<f64>,
    /// Log-distance ratio η = log10(D_C(z_cmb)/D_C(z_cos)).
    #[arg(
        long,
        value_name = "ETA",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub eta: Option<f64>,
    /// 1σ error of μ, mag.
    #[arg(
        long = "mu-err",
        value_name = "MAG",
        requires = "mu",
        allow_negative_numbers = true
    )]
    pub mu_err: Option<f64>,
    /// 1σ error of --dl.
    #[arg(
        long = "dl-err",
        value_name = "MPC",
        requires = "dl",
        allow_negative_numbers = true
    )]
    pub dl_err: Option<f64>,
    /// 1σ error of --dc.
    #[arg(
        long = "dc-err",
        value_name = "MPC",
        requires = "dc",
        allow_negative_numbers = true
    )]
    pub dc_err: Option<f64>,
    /// 1σ error of --da.
    #[arg(
        long = "da-err",
        value_name = "MPC",
        requires = "da",
        allow_negative_numbers = true
    )]
    pub da_err: Option<f64>,
    /// 1σ error of --eta.
    #[arg(
        long = "eta-err",
        value_name = "ETA",
        requires = "eta",
        allow_negative_numbers = true
    )]
    pub eta_err: Option<f64>,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    #[command(flatten)]
    pub frame: FrameFlags,
    #[command(flatten)]
    pub conventions: ConventionFlags,
    /// Print one JSON object instead of a table.
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: GalaxyArgs) -> anyhow::Result<()> {
    let (kind, value, error) = match (a.mu, a.dl, a.dc, a.da, a.eta) {
        (Some(v), ..) => (DistanceKind::Mu, v, a.mu_err),
        (_, Some(v), ..) => (DistanceKind::Dl, v, a.dl_err),
        (_, _, Some(v), ..) => (DistanceKind::Dc, v, a.dc_err),
        (_, _, _, Some(v), _) => (DistanceKind::Da, v, a.da_err),
        (.., Some(v)) => (DistanceKind::Eta, v, a.eta_err),
        _ => {
            return Err(anyhow!(
                "give one distance: --mu, --dl, --dc, --da or --eta"
            ))
        }
    };
    let plan = plan_galaxy(GalaxyOrder {
        ra: a.ra.clone(),
        dec: a.dec.clone(),
        z_helio: a.z_helio,
        cz_helio: a.cz_helio,
        z_err: a.z_err,
        distance_kind: kind,
        distance: value,
        distance_err: error,
        flags: RunConfig {
            cosmology: a.cosmology.choice(),
            frame: a.frame.choice(),
            conventions: a.conventions.choice(),
            ..Default::default()
        },
    })
    .map_err(|e| anyhow!(e))?;
    let report = run_galaxy(&plan).map_err(|e| anyhow!(e))?;
    let r = &report.result;
    let (ra, dec, z_helio) = (plan.ra_deg, plan.dec_deg, plan.z_helio);
    let frames = &plan.shared.frames;
    let cosmo_choice = &plan.shared.cosmology;
    let convention = plan.shared.convention;
    let length_unit = plan
        .shared
        .config
        .conventions
        .length_unit
        .unwrap_or_default();
    let has_errors = plan.has_errors();
    let notes = report.cautions.clone();
    let unit = length_unit.label();

    if a.json {
        let mut obj = json!({
            "ra": ra, "dec": dec,
            "glon": r.glon, "glat": r.glat, "sgl": r.sgl, "sgb": r.sgb,
            "sgx": r.sgx, "sgy": r.sgy, "sgz": r.sgz,
            "z_helio": z_helio,
            "z_cmb": r.z_cmb, "z_cos": r.z_cos, "z_pec": r.z_pec,
            "v_pec": r.v_pec,
            "d_c": r.d_c, "d_l": r.d_l, "eta": r.eta,
            "frame_chain": chain_json(&report.chain),
            "v_pec_low_z": r.v_pec_low_z,
            "v_pec_watkins_feldman": r.v_pec_watkins_feldman,
            "distance": {"kind": kind.name(), "value": value, "error": error},
            "length_unit": unit,
            "dl_convention": convention.name(),
            "boost": frames.method.name(),
            "cosmology": cosmo_choice,
            "cautions": notes,
        });
        if has_errors {
            let m = obj.as_object_mut().expect("object");
            m.insert("v_pec_err".into(), json!(r.v_pec_err));
            m.insert("eta_err".into(), json!(r.eta_err));
            m.insert("z_cos_err".into(), json!(r.z_cos_err));
        }
        println!("{}", serde_json::to_string_pretty(&obj)?);
        return Ok(());
    }
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

/// The chain as JSON: one object per boost, with the redshift once it is applied.
fn chain_json(chain: &[ChainRedshift]) -> serde_json::Value {
    serde_json::Value::Array(
        chain
            .iter()
            .map(|c| {
                json!({
                    "from": c.step.from,
                    "to": c.step.to,
                    "velocity_km_s": c.step.velocity_km_s,
                    "speed_km_s": c.step.speed_km_s,
                    "l_deg": c.step.l_deg,
                    "b_deg": c.step.b_deg,
                    "cos_theta": c.cos_theta,
                    "apex": c.step.apex,
                    "minus_apex": c.step.minus,
                    "z": c.z,
                })
            })
            .collect(),
    )
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
