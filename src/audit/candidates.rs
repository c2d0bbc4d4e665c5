//! The recomputations of a derived column, one per candidate convention: the boost (exact
//! or the legacy additive cz + v cos θ), the apex (each built-in dipole or apex, the user's
//! own, and one fitted to the column), the estimator (composition, cz − H0·d with H0
//! fitted, Watkins–Feldman), the luminosity-distance convention, c·z_pec against the
//! relativistic Doppler velocity, and whether the distances were read as Mpc or h⁻¹ Mpc.
//! Every formula is the one the rest of flowsift uses (`physics::restframe`,
//! `physics::estimators`, `physics::redshift`); nothing is recomputed here by other means.

use std::collections::BTreeMap;

use rayon::prelude::*;
use serde_json::{json, Value};

use super::apex_fit::{fit_apex, robust_scale, FittedApex};
use super::quantity::Quantity;
use crate::physics::constants::C_KM_S;
use crate::physics::cosmology::{luminosity_distance_of, Cosmology, LengthUnit};
use crate::physics::estimators::{
    cosmological_redshift, watkins_feldman_velocity, Distance, DistanceKind, DlConvention,
    Observation,
};
use crate::physics::redshift::{doppler_velocity_of, Cmb, Heliocentric, LocalGroup, Redshift};
use crate::physics::restframe::{legacy_additive, Apex, Boost, BoostMethod, ObserverRestFrame};
use crate::physics::sky::{Direction, Galactic};

/// The catalogue's distance input.
#[derive(Debug, Clone, Copy)]
pub struct DistanceInput<'a> {
    pub kind: DistanceKind,
    /// μ in mag, η, or a length as the column gives it (Mpc or h⁻¹ Mpc: the candidates try
    /// both); NaN where missing.
    pub values: &'a [f64],
}

/// Everything the recomputations read.
#[derive(Debug, Clone, Copy)]
pub struct AuditInputs<'a> {
    /// Galactic direction of each row (`None`: no usable position).
    pub directions: &'a [Option<Direction<Galactic>>],
    /// Heliocentric redshift of each row (NaN: missing).
    pub z_helio: &'a [f64],
    pub distance: Option<DistanceInput<'a>>,
    /// The run's cosmology (H0 for the composition and Watkins–Feldman candidates).
    pub cosmology: &'a Cosmology,
    /// CMB apices to try, the run's own first.
    pub cmb_apices: &'a [Apex],
    /// Local Group apices to try, the run's own first.
    pub lg_apices: &'a [Apex],
}

/// One recomputation of the column.
#[derive(Debug, Clone)]
pub struct Candidate {
    /// Short text, e.g. `boost=exact dipole=planck2018`.
    pub label: String,
    /// The convention choices, by the flag names (`boost`, `dipole`, `dl-convention` …).
    pub choices: BTreeMap<String, Value>,
    /// The column as this candidate makes it, in the column's unit (NaN: not computable).
    pub values: Vec<f64>,
    /// A parameter was fitted to the column itself (apex, H0, h).
    pub fitted: bool,
    /// The fitted apex, for the fitted-apex candidates.
    pub fitted_apex: Option<FittedApex>,
}

fn label_of(choices: &BTreeMap<String, Value>) -> String {
    choices
        .iter()
        .map(|(k, v)| match v {
            Value::String(s) => format!("{k}={s}"),
            Value::Number(n) => format!("{k}={:.3}", n.as_f64().unwrap_or(f64::NAN)),
            other => format!("{k}={other}"),
        })
        .collect::<Vec<_>>()
        .join(" ")
}

fn candidate(choices: BTreeMap<String, Value>, values: Vec<f64>, fitted: bool) -> Candidate {
    Candidate {
        label: label_of(&choices),
        choices,
        values,
        fitted,
        fitted_apex: None,
    }
}

/// z in frame `F` for every row, by the apex and method.
fn frame_redshifts<F: ObserverRestFrame>(
    inputs: &AuditInputs<'_>,
    apex: &Apex,
    method: BoostMethod,
) -> Result<Vec<f64>, String> {
    let boost = Boost::<F>::new(apex).map_err(|e| format!("apex {}: {e}", apex.name))?;
    Ok(inputs
        .directions
        .par_iter()
        .zip(inputs.z_helio.par_iter())
        .map(|(d, zh)| {
            let (Some(d), Ok(zh)) = (d, Redshift::<Heliocentric>::new(*zh)) else {
                return f64::NAN;
            };
            match method {
                BoostMethod::Exact => boost.from_heliocentric(zh, d).value(),
                BoostMethod::LegacyAdditive => legacy_additive(&boost, zh, d)
                    .map(|z| z.value())
                    .unwrap_or(f64::NAN),
            }
        })
        .collect())
}

const METHODS: [BoostMethod; 2] = [BoostMethod::Exact, BoostMethod::LegacyAdditive];

/// A slope a with y ≈ a·x, fitted with two passes that leave out rows beyond five robust
/// standard deviations (or `floor`) of the first. `None` without usable rows.
pub(crate) fn clipped_slope(x: &[f64], y: &[f64], floor: f64) -> Option<f64> {
    let mut keep: Vec<bool> = x
        .iter()
        .zip(y)
        .map(|(a, b)| a.is_finite() && b.is_finite())
        .collect();
    let mut slope = None;
    for _ in 0..3 {
        let (sxy, sxx) = x
            .iter()
            .zip(y)
            .zip(&keep)
            .filter(|(_, k)| **k)
            .fold((0.0, 0.0), |(sxy, sxx), ((a, b), _)| {
                (sxy + a * b, sxx + a * a)
            });
        if sxx <= 0.0 {
            return slope;
        }
        let s = sxy / sxx;
        slope = Some(s);
        let r: Vec<f64> = x.iter().zip(y).map(|(a, b)| b - s * a).collect();
        let cut = (5.0 * robust_scale(&r)).max(floor);
        keep = r.iter().map(|v| v.is_finite() && v.abs() <= cut).collect();
    }
    slope
}

/// The frame-change candidates for a CMB or Local Group column (`target` as z).
fn frame_candidates<F: ObserverRestFrame>(
    inputs: &AuditInputs<'_>,
    apices: &[Apex],
    apex_key: &str,
    target_z: &[f64],
    scale: f64,
) -> Result<Vec<Candidate>, String> {
    let mut out = vec![];
    for method in METHODS {
        for apex in apices {
            let z = frame_redshifts::<F>(inputs, apex, method)?;
            let mut c = BTreeMap::new();
            c.insert("boost".into(), json!(method.name()));
            c.insert(apex_key.into(), json!(apex.name));
            out.push(candidate(c, z.iter().map(|v| v * scale).collect(), false));
        }
        if let Some(fit) = fit_apex(
            inputs.directions,
            inputs.z_helio,
            target_z,
            method,
            Quantity::ZCmb.resolution(),
        ) {
            let apex = Apex::from_speed_direction(
                "fitted",
                apices.first().map(|a| a.frame).unwrap_or(F::NAME),
                fit.speed_km_s,
                fit.l_deg,
                fit.b_deg,
                "fitted to the audited column",
            )
            .map_err(|e| format!("fitted apex: {e}"))?;
            let z = frame_redshifts::<F>(inputs, &apex, method)?;
            let mut c = BTreeMap::new();
            c.insert("boost".into(), json!(method.name()));
            c.insert(apex_key.into(), json!("fitted"));
            let mut cand = candidate(c, z.iter().map(|v| v * scale).collect(), true);
            cand.fitted_apex = Some(fit);
            out.push(cand);
        }
    }
    Ok(out)
}

/// The conventions that matter for a distance kind (`None`: the kind has no convention).
fn conventions_for(kind: DistanceKind) -> Vec<Option<DlConvention>> {
    match kind {
        DistanceKind::Mu | DistanceKind::Dl | DistanceKind::Da => vec![
            Some(DlConvention::Observed),
            Some(DlConvention::Cosmological),
            Some(DlConvention::Full),
        ],
        DistanceKind::Dc | DistanceKind::Eta => vec![None],
    }
}

/// The length units to read a distance column in (`None`: not a length).
fn units_for(kind: DistanceKind) -> Vec<Option<LengthUnit>> {
    match kind {
        DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da => {
            vec![Some(LengthUnit::Mpc), Some(LengthUnit::MpcOverH)]
        }
        DistanceKind::Mu | DistanceKind::Eta => vec![None],
    }
}

/// z_cos of every row from its distance, under a convention and a length unit.
fn cosmological(
    inputs: &AuditInputs<'_>,
    d: &DistanceInput<'_>,
    z_cmb: &[f64],
    convention: Option<DlConvention>,
    unit: Option<LengthUnit>,
) -> Vec<f64> {
    let h = inputs.cosmology.params().little_h();
    let to_mpc = match unit {
        Some(LengthUnit::MpcOverH) => 1.0 / h,
        _ => 1.0,
    };
    let cosmo = inputs.cosmology;
    (0..z_cmb.len())
        .into_par_iter()
        .map(|i| {
            let (Ok(zh), Ok(zc)) = (
                Redshift::<Heliocentric>::new(inputs.z_helio[i]),
                Redshift::<Cmb>::new(z_cmb[i]),
            ) else {
                return f64::NAN;
            };
            let value = d.values[i] * to_mpc;
            if !value.is_finite() {
                return f64::NAN;
            }
            let obs = Observation {
                z_helio: zh,
                z_cmb: zc,
                z_err: 0.0,
                distance: Distance {
                    kind: d.kind,
                    value,
                    error: 0.0,
                },
            };
            cosmological_redshift(cosmo, &obs, convention.unwrap_or_default()).unwrap_or(f64::NAN)
        })
        .collect()
}

/// The distance (Mpc, or the column's own length unit) that cz − H0·d and Watkins–Feldman
/// take: D_L of a μ, else the column's length. `None` for η.
fn plain_distance(d: &DistanceInput<'_>) -> Option<Vec<f64>> {
    match d.kind {
        DistanceKind::Mu => Some(
            d.values
                .iter()
                .map(|m| luminosity_distance_of(*m))
                .collect(),
        ),
        DistanceKind::Eta => None,
        _ => Some(d.values.to_vec()),
    }
}

fn base_choices(
    method: BoostMethod,
    apex: &Apex,
    convention: Option<DlConvention>,
    unit: Option<LengthUnit>,
    h0: f64,
) -> BTreeMap<String, Value> {
    let mut c = BTreeMap::new();
    c.insert("boost".into(), json!(method.name()));
    c.insert("dipole".into(), json!(apex.name));
    if let Some(conv) = convention {
        c.insert("dl-convention".into(), json!(conv.name()));
    }
    if let Some(u) = unit {
        c.insert(
            "length-unit".into(),
            json!(match u {
                LengthUnit::Mpc => "mpc",
                LengthUnit::MpcOverH => "mpc-over-h",
            }),
        );
    }
    c.insert("h0".into(), json!(h0));
    c
}

/// Every candidate recomputation of a column holding `quantity` (`target` in the column's
/// unit).
pub fn candidates_for(
    quantity: Quantity,
    inputs: &AuditInputs<'_>,
    target: &[f64],
) -> Result<Vec<Candidate>, String> {
    let as_z: Vec<f64> = match quantity {
        Quantity::CzCmb | Quantity::CzLg | Quantity::CzCos => {
            target.iter().map(|v| v / C_KM_S).collect()
        }
        _ => target.to_vec(),
    };
    match quantity {
        Quantity::ZCmb => frame_candidates::<Cmb>(inputs, inputs.cmb_apices, "dipole", &as_z, 1.0),
        Quantity::CzCmb => {
            frame_candidates::<Cmb>(inputs, inputs.cmb_apices, "dipole", &as_z, C_KM_S)
        }
        Quantity::ZLg => {
            frame_candidates::<LocalGroup>(inputs, inputs.lg_apices, "local-group", &as_z, 1.0)
        }
        Quantity::CzLg => {
            frame_candidates::<LocalGroup>(inputs, inputs.lg_apices, "local-group", &as_z, C_KM_S)
        }
        Quantity::VPec | Quantity::Eta | Quantity::ZCos | Quantity::CzCos | Quantity::Distance => {
            let d = inputs.distance.as_ref().ok_or_else(|| {
                format!(
                    "a {} column needs a distance input (--distance-column with --distance-kind)",
                    quantity.name()
                )
            })?;
            distance_candidates(quantity, inputs, d, target)
        }
    }
}

fn distance_candidates(
    quantity: Quantity,
    inputs: &AuditInputs<'_>,
    d: &DistanceInput<'_>,
    target: &[f64],
) -> Result<Vec<Candidate>, String> {
    let cosmo = inputs.cosmology;
    let h0 = cosmo.params().h0;
    let floor = quantity.resolution();
    let mut out = vec![];
    // The distance quantity is made from the run's own frame choice only (the first apex,
    // exact boost): the frames enter it at O(β) through z_cos alone.
    let (methods, apices): (&[BoostMethod], &[Apex]) = if quantity == Quantity::Distance {
        (
            &METHODS[..1],
            &inputs.cmb_apices[..inputs.cmb_apices.len().min(1)],
        )
    } else {
        (&METHODS, inputs.cmb_apices)
    };
    if quantity == Quantity::Distance && d.kind == DistanceKind::Mu {
        let dl: Vec<f64> = d
            .values
            .iter()
            .map(|m| luminosity_distance_of(*m))
            .collect();
        out.extend(scaled_distances(&dl, "dl", BTreeMap::new(), target, floor));
    }
    for &method in methods {
        for apex in apices {
            let z_cmb = frame_redshifts::<Cmb>(inputs, apex, method)?;
            for convention in conventions_for(d.kind) {
                for unit in units_for(d.kind) {
                    let z_cos = cosmological(inputs, d, &z_cmb, convention, unit);
                    let choices = base_choices(method, apex, convention, unit, h0);
                    match quantity {
                        Quantity::VPec => {
                            let z_pec: Vec<f64> = z_cmb
                                .iter()
                                .zip(&z_cos)
                                .map(|(zc, zs)| (1.0 + zc) / (1.0 + zs) - 1.0)
                                .collect();
                            for (form, f) in [
                                (
                                    "relativistic-doppler",
                                    doppler_velocity_of as fn(f64) -> f64,
                                ),
                                ("linear", |z: f64| C_KM_S * z),
                            ] {
                                let mut c = choices.clone();
                                c.insert("estimator".into(), json!("composition"));
                                c.insert("velocity".into(), json!(form));
                                out.push(candidate(
                                    c,
                                    z_pec.iter().map(|z| f(*z)).collect(),
                                    false,
                                ));
                            }
                        }
                        Quantity::Eta => {
                            let eta: Vec<f64> = z_cmb
                                .iter()
                                .zip(&z_cos)
                                .map(|(zc, zs)| {
                                    match (
                                        cosmo.comoving_distance(zc.max(0.0)),
                                        cosmo.comoving_distance(*zs),
                                    ) {
                                        (Ok(a), Ok(b)) if b > 0.0 => (a / b).log10(),
                                        _ => f64::NAN,
                                    }
                                })
                                .collect();
                            out.push(candidate(choices, eta, false));
                        }
                        Quantity::ZCos => out.push(candidate(choices, z_cos, false)),
                        Quantity::CzCos => out.push(candidate(
                            choices,
                            z_cos.iter().map(|z| z * C_KM_S).collect(),
                            false,
                        )),
                        Quantity::Distance => {
                            for (kind, f) in [
                                (
                                    "dl",
                                    (|dm: f64, z: f64| (1.0 + z) * dm) as fn(f64, f64) -> f64,
                                ),
                                ("dc", |dc: f64, _| dc),
                                ("da", |dm: f64, z: f64| dm / (1.0 + z)),
                            ] {
                                let dist: Vec<f64> = z_cos
                                    .iter()
                                    .map(|z| match cosmo.comoving_distance(*z) {
                                        Ok(dc) => {
                                            let dm = cosmo.transverse_from_comoving(dc);
                                            f(if kind == "dc" { dc } else { dm }, *z)
                                        }
                                        Err(_) => f64::NAN,
                                    })
                                    .collect();
                                out.extend(scaled_distances(
                                    &dist,
                                    kind,
                                    choices.clone(),
                                    target,
                                    floor,
                                ));
                            }
                        }
                        _ => {}
                    }
                }
            }
            // cz − H0·d (H0 fitted) and Watkins–Feldman (the run's H0).
            if let Some(dist) = plain_distance(d) {
                let cz: Vec<f64> = z_cmb.iter().map(|z| C_KM_S * z).collect();
                let mut c = BTreeMap::new();
                c.insert("boost".into(), json!(method.name()));
                c.insert("dipole".into(), json!(apex.name));
                c.insert("estimator".into(), json!("low-redshift"));
                match quantity {
                    Quantity::VPec => {
                        let y: Vec<f64> = cz.iter().zip(target).map(|(a, v)| a - v).collect();
                        if let Some(h) = clipped_slope(&dist, &y, floor) {
                            c.insert("h0".into(), json!(h));
                            let v = cz.iter().zip(&dist).map(|(a, x)| a - h * x).collect();
                            out.push(candidate(c, v, true));
                        }
                        if d.kind != DistanceKind::Da && d.kind != DistanceKind::Dc {
                            for unit in units_for(d.kind) {
                                let to_mpc = match unit {
                                    Some(LengthUnit::MpcOverH) => 1.0 / cosmo.params().little_h(),
                                    _ => 1.0,
                                };
                                let mut c = base_choices(method, apex, None, unit, h0);
                                c.insert("estimator".into(), json!("watkins-feldman"));
                                let v = z_cmb
                                    .iter()
                                    .zip(&dist)
                                    .map(|(z, x)| match Redshift::<Cmb>::new(*z) {
                                        Ok(z) if *x > 0.0 => {
                                            watkins_feldman_velocity(cosmo, z, x * to_mpc)
                                        }
                                        _ => f64::NAN,
                                    })
                                    .collect();
                                out.push(candidate(c, v, false));
                            }
                        }
                    }
                    Quantity::ZCos | Quantity::CzCos => {
                        let unit = if quantity == Quantity::ZCos {
                            C_KM_S
                        } else {
                            1.0
                        };
                        let y: Vec<f64> = target.iter().map(|t| t * unit).collect();
                        if let Some(h) = clipped_slope(&dist, &y, floor * unit) {
                            c.insert("h0".into(), json!(h));
                            let z = dist.iter().map(|x| h * x / unit).collect();
                            out.push(candidate(c, z, true));
                        }
                    }
                    _ => {}
                }
            }
        }
    }
    Ok(out)
}

/// A distance as Mpc and as h⁻¹ Mpc with h fitted to the column (the implied H0 = 100 h).
fn scaled_distances(
    mpc: &[f64],
    kind: &str,
    mut choices: BTreeMap<String, Value>,
    target: &[f64],
    floor: f64,
) -> Vec<Candidate> {
    choices.insert("distance-kind".into(), json!(kind));
    let mut out = vec![];
    let mut c = choices.clone();
    c.insert("length-unit".into(), json!("mpc"));
    out.push(candidate(c, mpc.to_vec(), false));
    if let Some(h) = clipped_slope(mpc, target, floor) {
        let mut c = choices;
        c.insert("length-unit".into(), json!("mpc-over-h"));
        c.insert("h0".into(), json!(100.0 * h));
        out.push(candidate(c, mpc.iter().map(|x| h * x).collect(), true));
    }
    out
}
