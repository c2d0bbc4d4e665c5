//! Peculiar velocities from a redshift and a redshift-independent distance.
//!
//! The exact route: the distance and the cosmology give the cosmological redshift z_cos;
//! the CMB-frame redshift and z_cos give the peculiar redshift by composition,
//! 1 + z_pec = (1 + z_cmb)/(1 + z_cos); the relativistic Doppler formula turns z_pec into a
//! radial velocity. Two approximate estimators are kept for comparison only: the low-redshift
//! difference c z − H0 d, and the estimator of Watkins & Feldman (2015).
//!
//! # Luminosity-distance conventions
//! A measured luminosity distance (or distance modulus) of a moving source seen by a moving
//! observer is not the FLRW D_L at any one redshift. Three conventions are offered:
//!
//! * `observed`: D_L = (1 + z_helio) D_M(z_cos) — the usual choice in SN Ia Hubble diagrams
//!   (e.g. Davis et al. 2011, ApJ 741, 67; Carr et al. 2022, PASA 39, 46).
//! * `cosmological`: D_L = (1 + z_cos) D_M(z_cos) — the FLRW relation at z_cos, as in older
//!   distance catalogues.
//! * `full`: D_L = (1 + z_helio)(1 + z_cmb) D_M(z_cos)/(1 + z_cos), i.e.
//!   D_L = D̄_L(z_cos) (1 + z_pec)² (1 + z_obs-motion) with 1 + z_obs-motion =
//!   (1 + z_helio)/(1 + z_cmb). Derivation: the angular-diameter distance of a source does not
//!   depend on the source's radial velocity (the light bundle converging on the observer
//!   is fixed by the geometry), so in the CMB frame D_A = D_M(z_cos)/(1 + z_cos); the
//!   observer's own motion aberrates solid angles by the Doppler factor squared, so
//!   D_A,⊙ = D_A (1 + z_cmb)/(1 + z_helio); Etherington's reciprocity (Etherington 1933,
//!   Phil. Mag. 15, 761), D_L = (1 + z)² D_A with the observed z_helio, gives the form above.
//!   For the source's motion this is the (1 + z_pec)² factor of Hui & Greene (2006),
//!   astro-ph/0512159, and Davis et al. (2011).

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::constants::C_KM_S;
use super::cosmology::{luminosity_distance_of, Cosmology};
use super::redshift::{
    doppler_velocity_derivative, doppler_velocity_of, peculiar_part, Cmb, Cosmological,
    Heliocentric, Redshift,
};
use super::PhysicsError;

const LN10: f64 = std::f64::consts::LN_10;

/// How a luminosity distance relates to the redshifts of a moving source (see module docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema, Default)]
#[serde(rename_all = "kebab-case")]
pub enum DlConvention {
    /// D_L = (1 + z_helio) D_M(z_cos): the observer's motion only (common in SN Ia work).
    Observed,
    /// D_L = (1 + z_cos) D_M(z_cos): no motion at all (older catalogues).
    Cosmological,
    /// D_L = (1 + z_helio)(1 + z_pec) D_M(z_cos) = (1 + z_helio)(1 + z_cmb) D_M(z_cos)/(1 + z_cos):
    /// the flux of a moving source seen by a moving observer (the source's (1 + z_pec)² of
    /// Davis et al. 2011 and Hui & Greene 2006 with the observer's factor; from memory). The
    /// default.
    #[default]
    Full,
}

impl DlConvention {
    /// Stable name, as written in outputs.
    pub fn name(self) -> &'static str {
        match self {
            DlConvention::Observed => "observed",
            DlConvention::Cosmological => "cosmological",
            DlConvention::Full => "full",
        }
    }
}

/// The kind of redshift-independent distance a catalogue gives.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum DistanceKind {
    /// Distance modulus μ, mag.
    Mu,
    /// Luminosity distance, Mpc.
    Dl,
    /// Line-of-sight comoving distance, Mpc.
    Dc,
    /// Log-distance ratio η = log10(D_C(z_cmb)/D_C(z_cos)).
    Eta,
    /// Angular-diameter distance (size-based indicators such as the Fundamental Plane), Mpc.
    Da,
}

impl DistanceKind {
    /// Stable name (also the default column name).
    pub fn name(self) -> &'static str {
        match self {
            DistanceKind::Mu => "mu",
            DistanceKind::Dl => "dl",
            DistanceKind::Dc => "dc",
            DistanceKind::Eta => "eta",
            DistanceKind::Da => "da",
        }
    }
}

/// A measured distance with its 1σ error (0 when unknown).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Distance {
    pub kind: DistanceKind,
    /// μ in mag, D in Mpc, or η.
    pub value: f64,
    /// 1σ error in the same unit; 0 when not given.
    pub error: f64,
}

/// Everything the estimator needs besides the cosmology.
#[derive(Debug, Clone, Copy)]
pub struct Observation {
    pub z_helio: Redshift<Heliocentric>,
    pub z_cmb: Redshift<Cmb>,
    /// 1σ error of z_helio (0 when unknown).
    pub z_err: f64,
    pub distance: Distance,
}

/// Options that shape the estimate.
#[derive(Debug, Clone, Copy, Default)]
pub struct EstimatorOptions {
    pub convention: DlConvention,
    /// Intrinsic velocity dispersion σ_* (km/s) added in quadrature to the velocity error.
    pub sigma_star_km_s: f64,
    /// How z_cmb was made from z_helio, for ∂z_cmb/∂z_helio in the errors: the exact boost
    /// scales 1 + z (∂ = (1 + z_cmb)/(1 + z_helio)); the additive cz + v cos θ shifts z (∂ = 1).
    pub boost: crate::physics::restframe::BoostMethod,
}

/// The result for one object.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PeculiarVelocity {
    pub z_cos: f64,
    pub z_cos_err: f64,
    pub z_pec: f64,
    /// Radial peculiar velocity, km/s (relativistic Doppler of z_pec).
    pub v_pec: f64,
    /// 1σ, first order, including σ_* when given.
    pub v_pec_err: f64,
    /// Comoving distance at z_cos, Mpc.
    pub d_c: f64,
    /// Luminosity distance implied by the input, Mpc (as measured: μ or D_L; for D_C and η
    /// inputs, the FLRW (1 + z_cos) D_M(z_cos)).
    pub d_l: f64,
    /// log10(D_C(z_cmb)/D_C(z_cos)).
    pub eta: f64,
    pub eta_err: f64,
    /// First-order relative error of `d_l` from the distance error alone, σ(D_L)/D_L.
    pub d_l_rel_err: f64,
}

/// Solve for z_cos and the partial derivatives ∂z_cos/∂q (q the distance value),
/// ∂z_cos/∂z_helio and ∂z_cos/∂z_cmb at fixed other arguments.
struct CosmologicalSolution {
    z_cos: f64,
    dz_dq: f64,
    dz_dzh: f64,
    dz_dzc: f64,
    /// Luminosity distance in play, Mpc.
    d_l: f64,
    /// D_C(z_cos), Mpc, and dD_C/dz there.
    d_c: f64,
    dc_z: f64,
}

/// D_L (Mpc) and dD_L/dq for luminosity-type inputs (μ or D_L).
fn luminosity_input(d: &Distance) -> Result<(f64, f64), PhysicsError> {
    if !d.value.is_finite() {
        return Err(PhysicsError::NotFinite {
            quantity: "distance",
            value: d.value,
        });
    }
    match d.kind {
        DistanceKind::Mu => {
            let dl = luminosity_distance_of(d.value);
            if !(dl.is_finite() && dl > 0.0) {
                // A modulus that reads as a number but names no distance (μ = 1e20): no
                // redshift gives it.
                return Err(PhysicsError::DistanceOutOfReach {
                    what: "luminosity distance of the distance modulus",
                    distance: dl,
                    z_max: f64::INFINITY,
                });
            }
            Ok((dl, dl * LN10 / 5.0))
        }
        DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da if d.value <= 0.0 => {
            Err(PhysicsError::NotPositive {
                quantity: "distance",
                value: d.value,
            })
        }
        DistanceKind::Dl => Ok((d.value, 1.0)),
        _ => Ok((f64::NAN, f64::NAN)),
    }
}

/// The cosmological redshift implied by the observation's distance under `convention`
/// (see the module documentation), without derivatives: the fast path for Monte Carlo.
pub fn cosmological_redshift(
    cosmo: &Cosmology,
    obs: &Observation,
    convention: DlConvention,
) -> Result<f64, PhysicsError> {
    let (d_l, _) = luminosity_input(&obs.distance)?;
    invert_for_redshift(cosmo, obs, convention, d_l)
}

/// [`cosmological_redshift`] with the luminosity distance of a μ or D_L input already known.
fn invert_for_redshift(
    cosmo: &Cosmology,
    obs: &Observation,
    convention: DlConvention,
    d_l: f64,
) -> Result<f64, PhysicsError> {
    let d = obs.distance;
    let zh1 = obs.z_helio.one_plus();
    let zc1 = obs.z_cmb.one_plus();
    match d.kind {
        // A D_A input: by Etherington's reciprocity D_L = (1 + z_obs)² D_A for any motions
        // (Etherington 1933, Phil. Mag. 15, 761), so with the observer's redshift z_helio the
        // observed and full conventions are those of D_L = (1 + z_helio)² D_A; the
        // cosmological convention ignores all motion, D_A = D_M(z_cos)/(1 + z_cos).
        DistanceKind::Da => match convention {
            DlConvention::Cosmological => angular_root(cosmo, d.value, obs.z_cmb.value()),
            DlConvention::Observed => cosmo.z_from_transverse(d.value * zh1),
            DlConvention::Full => angular_root(cosmo, d.value * zh1 / zc1, obs.z_cmb.value()),
        },
        DistanceKind::Mu | DistanceKind::Dl => match convention {
            DlConvention::Cosmological => cosmo.z_from_luminosity(d_l),
            DlConvention::Observed => cosmo.z_from_transverse(d_l / zh1),
            DlConvention::Full => angular_root(cosmo, d_l / (zh1 * zc1), obs.z_cmb.value()),
        },
        DistanceKind::Dc => cosmo.z_from_comoving(d.value),
        DistanceKind::Eta => cosmo
            .z_from_comoving(cosmo.comoving_distance(obs.z_cmb.value())? * 10f64.powf(-d.value)),
    }
}

/// Peculiar velocities beyond this, km/s, make a root of the D_A inversion inadmissible when
/// the other root is admissible (no galaxy's peculiar velocity approaches it; common practice).
pub const ADMISSIBLE_PECULIAR_SPEED_KM_S: f64 = 10_000.0;

/// z_cos from an angular-diameter distance. D_A peaks (near z ≈ 1.6 for Ω_m = 0.3), so a
/// distance below the peak value has a root on each side of it; the root consistent with
/// the observed redshift is the one nearest z_cmb in ln(1 + z). When both roots imply
/// peculiar speeds below [`ADMISSIBLE_PECULIAR_SPEED_KM_S`] the distance cannot tell them
/// apart and the object gets [`PhysicsError::TwoDistanceSolutions`].
pub fn angular_root(cosmo: &Cosmology, d_a: f64, z_cmb: f64) -> Result<f64, PhysicsError> {
    let lower = cosmo.z_from_angular_diameter(d_a)?;
    let uc = z_cmb.ln_1p();
    let u_peak = cosmo.z_angular_peak().ln_1p();
    // The upper root lies beyond the peak: it can be nearer only if the peak is.
    if (lower.ln_1p() - uc).abs() <= (u_peak - uc).abs() {
        return Ok(lower);
    }
    let Ok(upper) = cosmo.z_from_angular_diameter_upper(d_a) else {
        return Ok(lower);
    };
    let speed = |z: f64| {
        crate::physics::redshift::doppler_velocity_of((1.0 + z_cmb) / (1.0 + z) - 1.0).abs()
    };
    let bound = ADMISSIBLE_PECULIAR_SPEED_KM_S;
    if speed(lower) < bound && speed(upper) < bound {
        return Err(PhysicsError::TwoDistanceSolutions {
            lower,
            upper,
            bound_km_s: bound,
        });
    }
    Ok(if (upper.ln_1p() - uc).abs() < (lower.ln_1p() - uc).abs() {
        upper
    } else {
        lower
    })
}

fn solve_cosmological(
    cosmo: &Cosmology,
    obs: &Observation,
    convention: DlConvention,
) -> Result<CosmologicalSolution, PhysicsError> {
    let d = obs.distance;
    if d.kind == DistanceKind::Da && convention != DlConvention::Cosmological {
        // D_L = (1 + z_helio)² D_A (Etherington 1933): solve as a D_L input, then carry
        // z_helio's part in D_L into ∂z_cos/∂z_helio.
        luminosity_input(&d)?;
        let zh1 = obs.z_helio.one_plus();
        let as_dl = Observation {
            distance: Distance {
                kind: DistanceKind::Dl,
                value: zh1 * zh1 * d.value,
                error: zh1 * zh1 * d.error,
            },
            ..*obs
        };
        let s = solve_cosmological(cosmo, &as_dl, convention)?;
        return Ok(CosmologicalSolution {
            dz_dq: s.dz_dq * zh1 * zh1,
            dz_dzh: s.dz_dzh + s.dz_dq * 2.0 * zh1 * d.value,
            ..s
        });
    }
    let (d_l, dl_dq) = luminosity_input(&d)?;
    let z = invert_for_redshift(cosmo, obs, convention, d_l)?;
    let zh1 = obs.z_helio.one_plus();
    let zc1 = obs.z_cmb.one_plus();
    let d_h = cosmo.hubble_distance();
    let dc = cosmo.comoving_distance(z)?;
    let dm = cosmo.transverse_from_comoving(dc);
    // dD_C/dz = D_H/E; dD_M/dz = dD_M/dD_C · dD_C/dz.
    let dc_z = d_h / cosmo.efunc(z);
    let dm_z = cosmo.transverse_derivative(dc) * dc_z;
    let (dz_dq, dz_dzh, dz_dzc, d_l) = match d.kind {
        DistanceKind::Mu | DistanceKind::Dl => match convention {
            // G = (1+z) D_M = D_L.
            DlConvention::Cosmological => (dl_dq / (dm + (1.0 + z) * dm_z), 0.0, 0.0, d_l),
            // G = D_M = D_L/(1+z_h).
            DlConvention::Observed => {
                let target = d_l / zh1;
                (dl_dq / zh1 / dm_z, -target / zh1 / dm_z, 0.0, d_l)
            }
            // G = D_M/(1+z) = D_L/((1+z_h)(1+z_cmb)).
            DlConvention::Full => {
                let target = d_l / (zh1 * zc1);
                let g_z = -dm / ((1.0 + z) * (1.0 + z)) + dm_z / (1.0 + z);
                (
                    dl_dq / (zh1 * zc1) / g_z,
                    -target / zh1 / g_z,
                    -target / zc1 / g_z,
                    d_l,
                )
            }
        },
        // G = D_M/(1+z) = D_A (the cosmological convention; the others went through D_L).
        DistanceKind::Da => {
            let g_z = -dm / ((1.0 + z) * (1.0 + z)) + dm_z / (1.0 + z);
            (1.0 / g_z, 0.0, 0.0, (1.0 + z) * dm)
        }
        // G = D_C = d.
        DistanceKind::Dc => (1.0 / dc_z, 0.0, 0.0, (1.0 + z) * dm),
        // G = D_C = D_C(z_cmb) 10^−η.
        DistanceKind::Eta => {
            let zc = obs.z_cmb.value();
            let ratio = 10f64.powf(-d.value);
            let target = cosmo.comoving_distance(zc)? * ratio;
            (
                -target * LN10 / dc_z,
                0.0,
                ratio * d_h / cosmo.efunc(zc) / dc_z,
                (1.0 + z) * dm,
            )
        }
    };
    Ok(CosmologicalSolution {
        z_cos: z,
        dz_dq,
        dz_dzh,
        dz_dzc,
        d_l,
        d_c: dc,
        dc_z,
    })
}

/// The exact peculiar velocity of one object, with first-order errors.
///
/// Errors: σ_v² = (∂v/∂z_helio σ_z)² + (∂v/∂q σ_q)² + σ_*², the derivatives taken through
/// the boost (z_cmb depends on z_helio), the distance inversion (z_cos depends on the
/// distance and, in the `observed` and `full` conventions and for η, on the redshifts) and
/// the composition and Doppler laws.
pub fn peculiar_velocity(
    cosmo: &Cosmology,
    obs: &Observation,
    options: &EstimatorOptions,
) -> Result<PeculiarVelocity, PhysicsError> {
    let sol = solve_cosmological(cosmo, obs, options.convention)?;
    let z_cos = Redshift::<Cosmological>::new(sol.z_cos)?;
    let z_pec = peculiar_part(obs.z_cmb, z_cos).value();
    let v_pec = doppler_velocity_of(z_pec);

    let zc1 = obs.z_cmb.one_plus();
    let zcos1 = z_cos.one_plus();
    // dz_cmb/dz_helio: the boost is linear in 1 + z.
    let k = match options.boost {
        crate::physics::restframe::BoostMethod::Exact => zc1 / obs.z_helio.one_plus(),
        crate::physics::restframe::BoostMethod::LegacyAdditive => 1.0,
    };
    let dzcos_dzh = sol.dz_dzh + sol.dz_dzc * k;
    let dzp_dzh = k / zcos1 - zc1 / (zcos1 * zcos1) * dzcos_dzh;
    let dzp_dq = -zc1 / (zcos1 * zcos1) * sol.dz_dq;
    let dv = doppler_velocity_derivative(z_pec);
    let var_v = (dv * dzp_dzh * obs.z_err).powi(2) + (dv * dzp_dq * obs.distance.error).powi(2);
    let v_pec_err = (var_v + options.sigma_star_km_s.powi(2)).sqrt();

    let d_c = sol.d_c;
    let dc_obs = cosmo.comoving_distance(obs.z_cmb.value().max(0.0))?;
    let eta = if obs.distance.kind == DistanceKind::Eta {
        obs.distance.value
    } else {
        (dc_obs / d_c).log10()
    };
    let dc_z = sol.dc_z;
    let dcobs_z = cosmo.comoving_distance_derivative(obs.z_cmb.value());
    let deta_dzh = (dcobs_z / dc_obs * k - dc_z / d_c * dzcos_dzh) / LN10;
    let deta_dq = -dc_z / d_c * sol.dz_dq / LN10;
    let eta_err = ((deta_dzh * obs.z_err).powi(2) + (deta_dq * obs.distance.error).powi(2)).sqrt();
    let z_cos_err =
        ((dzcos_dzh * obs.z_err).powi(2) + (sol.dz_dq * obs.distance.error).powi(2)).sqrt();
    // σ(D_L)/D_L: direct for μ (D_L ∝ 10^(μ/5)) and D_L; otherwise through z_cos, with
    // dD_L/dz = D_M + (1 + z) dD_M/dz for D_L = (1 + z) D_M.
    let d_l_rel_err = match obs.distance.kind {
        DistanceKind::Mu => LN10 / 5.0 * obs.distance.error,
        DistanceKind::Dl => obs.distance.error / obs.distance.value,
        _ => {
            let dm = cosmo.transverse_from_comoving(sol.d_c);
            let dlnl_dz = 1.0 / zcos1 + cosmo.transverse_derivative(sol.d_c) * sol.dc_z / dm;
            (dlnl_dz * sol.dz_dq * obs.distance.error).abs()
        }
    };
    Ok(PeculiarVelocity {
        z_cos: sol.z_cos,
        z_cos_err,
        z_pec,
        v_pec,
        v_pec_err,
        d_c,
        d_l: sol.d_l,
        eta,
        eta_err,
        d_l_rel_err,
    })
}

/// The low-redshift estimator v = c z_cmb − H0 d, with d the luminosity distance in play.
/// For comparison only: it takes H0 d for c z_cos and drops the 1/(1 + z_cos) factor of the
/// composition law.
pub fn low_redshift_velocity(h0: f64, z_cmb: Redshift<Cmb>, d_mpc: f64) -> f64 {
    C_KM_S * z_cmb.value() - h0 * d_mpc
}

/// The estimator of Watkins & Feldman (2015), MNRAS 450, 1868 (arXiv:1411.6665):
/// v = c z_mod/(1 + z_mod) · ln(c z_mod / (H0 d)), with
/// z_mod = z [1 + ½(1 − q0) z − ⅙(1 − q0 − 3q0² + j0 − Ω_k) z²], z the CMB-frame redshift
/// and d the luminosity distance (the bracket is the third-order expansion of H0 D_L/c,
/// Visser 2004, CQG 21, 2603, whose curvature term kc²/(H0² a0²) is −Ω_k; it vanishes in a
/// flat model, and the test below checks it on an open one). The exact form is from memory
/// of the papers; it is offered for comparison, never used for the main results.
pub fn watkins_feldman_velocity(cosmo: &Cosmology, z_cmb: Redshift<Cmb>, d_l_mpc: f64) -> f64 {
    let (q0, j0) = cosmo.params().deceleration_jerk();
    let z = z_cmb.value();
    let omega_k = cosmo.params().omega_k();
    let z_mod =
        z * (1.0 + 0.5 * (1.0 - q0) * z - (1.0 - q0 - 3.0 * q0 * q0 + j0 - omega_k) * z * z / 6.0);
    let cz = C_KM_S * z_mod;
    cz / (1.0 + z_mod) * (cz / (cosmo.params().h0 * d_l_mpc)).ln()
}

/// First-order error of [`watkins_feldman_velocity`], from the error of the CMB-frame
/// redshift and the relative error of the luminosity distance, taken as independent:
/// with A = c z_mod/(1 + z_mod) and L = ln(c z_mod/(H0 d)), v = A·L, so
/// ∂v/∂ln d = −A and ∂v/∂z = [c L/(1 + z_mod)² + A/z_mod] dz_mod/dz, with
/// dz_mod/dz = 1 + (1 − q0) z − ½(1 − q0 − 3q0² + j0 − Ω_k) z² (differentiating the form
/// above; no term is taken from the paper beyond it).
pub fn watkins_feldman_error(
    cosmo: &Cosmology,
    z_cmb: Redshift<Cmb>,
    z_cmb_err: f64,
    d_l_mpc: f64,
    d_l_rel_err: f64,
) -> f64 {
    let (q0, j0) = cosmo.params().deceleration_jerk();
    let z = z_cmb.value();
    let c3 = 1.0 - q0 - 3.0 * q0 * q0 + j0 - cosmo.params().omega_k();
    let z_mod = z * (1.0 + 0.5 * (1.0 - q0) * z - c3 * z * z / 6.0);
    let dzm_dz = 1.0 + (1.0 - q0) * z - 0.5 * c3 * z * z;
    let a = C_KM_S * z_mod / (1.0 + z_mod);
    let l = (C_KM_S * z_mod / (cosmo.params().h0 * d_l_mpc)).ln();
    let dv_dz = (C_KM_S * l / (1.0 + z_mod).powi(2) + a / z_mod) * dzm_dz;
    ((dv_dz * z_cmb_err).powi(2) + (a * d_l_rel_err).powi(2)).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::cosmology::CosmologyParams;
    use crate::physics::redshift::{compose_cmb, doppler_redshift};

    fn cosmo() -> Cosmology {
        Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3)).unwrap()
    }

    /// Forward-model a galaxy and recover its velocity exactly, in each convention.
    #[test]
    fn exact_round_trip_each_convention() {
        let c = cosmo();
        for conv in [
            DlConvention::Observed,
            DlConvention::Cosmological,
            DlConvention::Full,
        ] {
            for (zcos, v) in [(0.01, 300.0), (0.1, -800.0), (0.8, 1200.0)] {
                let zc = compose_cmb(Redshift::new(zcos).unwrap(), doppler_redshift(v).unwrap());
                // Pretend the observer is at rest in the CMB frame except for a small motion.
                let zh = Redshift::<Heliocentric>::new(zc.value() - 0.001).unwrap();
                let dm = c.transverse_comoving_distance(zcos).unwrap();
                let dl = match conv {
                    DlConvention::Observed => zh.one_plus() * dm,
                    DlConvention::Cosmological => (1.0 + zcos) * dm,
                    DlConvention::Full => zh.one_plus() * zc.one_plus() * dm / (1.0 + zcos),
                };
                let obs = Observation {
                    z_helio: zh,
                    z_cmb: zc,
                    z_err: 0.0,
                    distance: Distance {
                        kind: DistanceKind::Dl,
                        value: dl,
                        error: 0.0,
                    },
                };
                let opts = EstimatorOptions {
                    convention: conv,
                    sigma_star_km_s: 0.0,
                    boost: Default::default(),
                };
                let pv = peculiar_velocity(&c, &obs, &opts).unwrap();
                assert!(
                    (pv.v_pec - v).abs() < 1e-6,
                    "{conv:?} {zcos}: {} vs {v}",
                    pv.v_pec
                );
            }
        }
    }

    /// Analytic first-order errors against finite differences of the full calculation.
    #[test]
    fn errors_match_finite_differences() {
        let c = cosmo();
        for conv in [
            DlConvention::Observed,
            DlConvention::Cosmological,
            DlConvention::Full,
        ] {
            for kind in [
                DistanceKind::Mu,
                DistanceKind::Dc,
                DistanceKind::Eta,
                DistanceKind::Da,
            ] {
                let value = match kind {
                    DistanceKind::Mu => 36.2,
                    DistanceKind::Dc => 170.0,
                    DistanceKind::Eta => 0.03,
                    DistanceKind::Da => 160.0,
                    DistanceKind::Dl => unreachable!(),
                };
                let zh = 0.041;
                let k = 1.0012; // (1 + z_cmb)/(1 + z_helio), a fixed boost
                let make = |zh: f64, q: f64| Observation {
                    z_helio: Redshift::new(zh).unwrap(),
                    z_cmb: Redshift::new((1.0 + zh) * k - 1.0).unwrap(),
                    z_err: 0.0,
                    distance: Distance {
                        kind,
                        value: q,
                        error: 0.0,
                    },
                };
                let opts = EstimatorOptions {
                    convention: conv,
                    sigma_star_km_s: 0.0,
                    boost: Default::default(),
                };
                let v = |zh: f64, q: f64| peculiar_velocity(&c, &make(zh, q), &opts).unwrap().v_pec;
                let (hz, hq) = (1e-7, value * 1e-7);
                let dvdz = (v(zh + hz, value) - v(zh - hz, value)) / (2.0 * hz);
                let dvdq = (v(zh, value + hq) - v(zh, value - hq)) / (2.0 * hq);
                let (sz, sq) = (1.5e-4, 0.02 * value.abs());
                let expect = ((dvdz * sz).powi(2) + (dvdq * sq).powi(2)).sqrt();
                let mut obs = make(zh, value);
                obs.z_err = sz;
                obs.distance.error = sq;
                let got = peculiar_velocity(&c, &obs, &opts).unwrap().v_pec_err;
                assert!(
                    (got - expect).abs() / expect < 1e-5,
                    "{conv:?} {kind:?}: {got} vs {expect}"
                );
            }
        }
    }

    /// Under the additive frame change z_cmb = z_helio + (v/c) cos θ, so ∂z_cmb/∂z_helio = 1:
    /// the first-order error from σ_z matches finite differences of the calculation with
    /// z_cmb shifted by the same amount as z_helio (not scaled as by the exact boost).
    #[test]
    fn legacy_additive_errors_match_finite_differences() {
        let c = cosmo();
        let shift = 0.0012;
        let opts = EstimatorOptions {
            convention: DlConvention::Observed,
            sigma_star_km_s: 0.0,
            boost: crate::physics::restframe::BoostMethod::LegacyAdditive,
        };
        let make = |zh: f64, sz: f64| Observation {
            z_helio: Redshift::new(zh).unwrap(),
            z_cmb: Redshift::new(zh + shift).unwrap(),
            z_err: sz,
            distance: Distance {
                kind: DistanceKind::Mu,
                value: 36.2,
                error: 0.0,
            },
        };
        let zh = 0.041;
        let v = |zh: f64| peculiar_velocity(&c, &make(zh, 0.0), &opts).unwrap().v_pec;
        let h = 1e-7;
        let expect = ((v(zh + h) - v(zh - h)) / (2.0 * h) * 1.5e-4).abs();
        let got = peculiar_velocity(&c, &make(zh, 1.5e-4), &opts)
            .unwrap()
            .v_pec_err;
        assert!((got - expect).abs() / expect < 1e-5, "{got} vs {expect}");
    }

    /// A galaxy at rest: the Watkins–Feldman estimator, whose z_mod reproduces H0 D_L/c to
    /// third order (Visser 2004), gives ≈ 0 at z = 0.05; c z − H0 D_L is strongly negative
    /// there (D_L > c z/H0 for q0 < 1).
    #[test]
    fn watkins_feldman_near_zero_for_galaxy_at_rest() {
        let c = cosmo();
        let z = 0.05;
        let dl = c.luminosity_distance(z).unwrap();
        let v = watkins_feldman_velocity(&c, Redshift::new(z).unwrap(), dl);
        // The expansion is third order, so the residual is tiny at z = 0.05.
        assert!(v.abs() < 5.0, "{v}");
        let naive = low_redshift_velocity(70.0, Redshift::new(z).unwrap(), dl);
        assert!(naive < -200.0, "{naive}");
    }

    /// In an open model (Ω_m = 0.3, Ω_de = 0.5) the expansion needs its curvature term: at
    /// rest at z = 0.1 the estimator stays within 5 km/s of zero with it (without it, about
    /// 13 km/s: the z² term then misses Ω_k z²/6 of H0 D_L/(c z)).
    #[test]
    fn watkins_feldman_curvature_term() {
        let p = CosmologyParams {
            omega_de: 0.5,
            ..CosmologyParams::flat_lcdm(70.0, 0.3)
        };
        let c = Cosmology::new(p).unwrap();
        let z = 0.1;
        let dl = c.luminosity_distance(z).unwrap();
        let v = watkins_feldman_velocity(&c, Redshift::new(z).unwrap(), dl);
        assert!(v.abs() < 5.0, "{v}");
    }

    /// The analytic error of the Watkins–Feldman estimate against central finite differences
    /// of the estimator itself (independent of the derivative written out above).
    #[test]
    fn watkins_feldman_error_matches_finite_differences() {
        let c = cosmo();
        let (z, sz, dl, rel) = (0.05, 1.5e-4, 200.0, 0.2);
        let v = |zz: f64, d: f64| watkins_feldman_velocity(&c, Redshift::new(zz).unwrap(), d);
        let hz = 1e-6;
        let dv_dz = (v(z + hz, dl) - v(z - hz, dl)) / (2.0 * hz);
        let hl: f64 = 1e-6;
        let dv_dlnd = (v(z, dl * hl.exp()) - v(z, dl * (-hl).exp())) / (2.0 * hl);
        let numeric = ((dv_dz * sz).powi(2) + (dv_dlnd * rel).powi(2)).sqrt();
        let analytic = watkins_feldman_error(&c, Redshift::new(z).unwrap(), sz, dl, rel);
        assert!(
            (analytic / numeric - 1.0).abs() < 1e-6,
            "{analytic} vs {numeric}"
        );
    }

    /// σ(D_L)/D_L of a μ input is ln10/5 σ_μ (D_L = 10^(μ/5 − 5) Mpc, the definition of μ);
    /// of a D_L input, σ/D_L.
    #[test]
    fn luminosity_distance_relative_error_by_kind() {
        let c = cosmo();
        let z = 0.03;
        let mu = 5.0 * c.luminosity_distance(z).unwrap().log10() + 25.0;
        let obs = |kind, value, error| Observation {
            z_helio: Redshift::new(z).unwrap(),
            z_cmb: Redshift::new(z).unwrap(),
            z_err: 0.0,
            distance: Distance { kind, value, error },
        };
        let opts = EstimatorOptions::default();
        let pv = peculiar_velocity(&c, &obs(DistanceKind::Mu, mu, 0.4), &opts).unwrap();
        assert!((pv.d_l_rel_err - LN10 / 5.0 * 0.4).abs() < 1e-12);
        let dl = c.luminosity_distance(z).unwrap();
        let pv = peculiar_velocity(&c, &obs(DistanceKind::Dl, dl, 0.1 * dl), &opts).unwrap();
        assert!((pv.d_l_rel_err - 0.1).abs() < 1e-12);
        // A D_C input: D_L = (1 + z) D_C in a flat model, so σ(D_L)/D_L =
        // (1 + D_C/((1 + z) dD_C/dz)) σ(D_C)/D_C, to first order.
        let dc = c.comoving_distance(z).unwrap();
        let pv = peculiar_velocity(&c, &obs(DistanceKind::Dc, dc, 0.1 * dc), &opts).unwrap();
        let expected = (1.0 + dc / ((1.0 + z) * c.comoving_distance_derivative(z))) * 0.1;
        assert!(
            (pv.d_l_rel_err / expected - 1.0).abs() < 1e-6,
            "{}",
            pv.d_l_rel_err
        );
    }
}
