//! `flowsift galaxy`: one object from the command line.

use anyhow::{anyhow, Context};
use clap::Args;
use serde_json::json;

use flowsift::physics::estimators::{Distance, DistanceKind, EstimatorOptions};
use flowsift::physics::object::{evaluate, ObjectContext, ObjectInput};
use flowsift::physics::redshift::{Heliocentric, Redshift};
use flowsift::physics::sky::{parse_dec_deg, parse_ra_deg, Direction, Icrs, SkyRotations};
use flowsift::physics::PhysicsError;
use flowsift::settings::cautions;

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
    let ra = parse_ra_deg(&a.ra).context("--ra")?;
    let dec = parse_dec_deg(&a.dec).context("--dec")?;
    let z_helio = match (a.z_helio, a.cz_helio) {
        (Some(z), _) => z,
        (None, Some(cz)) => cz / flowsift::physics::constants::C_KM_S,
        (None, None) => unreachable!("clap requires one"),
    };
    Redshift::<Heliocentric>::new(z_helio).context("--z-helio")?;
    let (kind, value, error) = match (a.mu, a.dl, a.dc, a.eta) {
        (Some(v), ..) => (DistanceKind::Mu, v, a.mu_err),
        (_, Some(v), ..) => (DistanceKind::Dl, v, a.dl_err),
        (_, _, Some(v), _) => (DistanceKind::Dc, v, a.dc_err),
        (.., Some(v)) => (DistanceKind::Eta, v, a.eta_err),
        _ => return Err(anyhow!("give one distance: --mu, --dl, --dc or --eta")),
    };
    if !value.is_finite() {
        return Err(anyhow!(PhysicsError::NotFinite {
            quantity: "distance",
            value
        }))
        .context(format!("--{}", kind.name()));
    }
    if matches!(kind, DistanceKind::Dl | DistanceKind::Dc) && value <= 0.0 {
        return Err(anyhow!(
            "--{} must be a positive distance, got {value}",
            kind.name()
        ));
    }
    for (flag, v) in [
        ("--z-err", a.z_err),
        ("distance error", error),
        ("--sigma-star", a.conventions.sigma_star),
    ] {
        if let Some(v) = v {
            if !(v.is_finite() && v >= 0.0) {
                return Err(anyhow!("{flag} must be a non-negative number, got {v}"));
            }
        }
    }
    let cosmo_choice = a.cosmology.choice().resolve().map_err(|e| anyhow!(e))?;
    let frames = a.frame.choice().resolve().map_err(|e| anyhow!(e))?;
    let conv = a.conventions.choice();
    let convention = conv.dl_convention.unwrap_or_default();
    let length_unit = conv.length_unit.unwrap_or_default();

    // The table must reach beyond the largest redshift in play.
    let z_needed = (z_helio + 1.0) * 1.01 + 1.0;
    let cosmology = cosmo_choice
        .build(z_needed.min(19.0))
        .map_err(|e| anyhow!(e))?;
    let ctx = ObjectContext {
        cosmology: &cosmology,
        rotations: SkyRotations::default(),
        cmb: frames.cmb,
        method: frames.method,
        options: EstimatorOptions {
            convention,
            sigma_star_km_s: conv.sigma_star.unwrap_or(0.0),
        },
        length_unit,
    };
    let input = ObjectInput {
        ra_deg: ra,
        dec_deg: dec,
        z_helio,
        z_err: a.z_err.unwrap_or(0.0),
        distance: Distance {
            kind,
            value,
            error: error.unwrap_or(0.0),
        },
    };
    let r =
        evaluate(&ctx, &input).map_err(|e| anyhow!("cannot derive a peculiar velocity: {e}"))?;

    // The other rest frames, for reference.
    let gal = ctx
        .rotations
        .icrs_to_galactic
        .apply(&Direction::<Icrs>::from_lon_lat_deg(ra, dec)?);
    let zh = Redshift::<Heliocentric>::new(z_helio)?;
    let z_lg = frames.local_group.from_heliocentric(zh, &gal).value();
    let z_gsr = frames.galactic_rest.from_heliocentric(zh, &gal).value();
    let z_lsr = frames.lsr.from_heliocentric(zh, &gal).value();
    let has_errors = a.z_err.is_some() || error.is_some() || conv.sigma_star.is_some();
    let notes = cautions(&cosmo_choice, &frames, convention);
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
            "z_lg": z_lg, "z_gsr": z_gsr, "z_lsr": z_lsr,
            "v_pec_low_z": r.v_pec_low_z,
            "v_pec_watkins_feldman": r.v_pec_watkins_feldman,
            "distance": {"kind": kind.name(), "value": value, "error": error},
            "length_unit": unit,
            "dl_convention": convention.name(),
            "boost": frames.method.name(),
            "apex": frames.cmb_apex,
            "local_group_apex": frames.local_group_apex.name,
            "galactic_rest_apex": frames.galactic_rest_apex.name,
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
    let mut rows = vec![
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
        row("z_helio", f(z_helio, 7), "heliocentric (input)"),
        row(
            "z_cmb",
            f(r.z_cmb, 7),
            &format!(
                "CMB frame, '{}' apex, {} boost",
                frames.cmb_apex.name,
                frames.method.name()
            ),
        ),
        row(
            "z_lg",
            f(z_lg, 7),
            &format!("Local Group frame, '{}' apex", frames.local_group_apex.name),
        ),
        row(
            "z_gsr",
            f(z_gsr, 7),
            &format!(
                "Galactic standard of rest, '{}' apex",
                frames.galactic_rest_apex.name
            ),
        ),
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
    print_rows("flowsift galaxy", &rows);
    println!();
    for n in notes {
        println!("note: {n}");
    }
    Ok(())
}
