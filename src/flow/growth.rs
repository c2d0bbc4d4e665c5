//! The maximum-likelihood growth rate fσ8 of a peculiar-velocity sample.
//!
//! Method: the data d (η or radial velocities) are Gaussian with zero mean and covariance
//! C = (fσ8)² C̃ + diag(σ_i² + κ_i² σ_v²), C̃ the linear-theory covariance of the data for
//! fσ8 = 1 (the velocity covariance of Górski 1988 converted to the data's quantity by
//! κ_i = ∂d_i/∂v_i), σ_i the measurement errors and σ_v the nonlinear velocity dispersion;
//! L ∝ |C|^(−1/2) exp(−½ dᵀC⁻¹d). This is the likelihood of e.g. Johnson et al. (2014,
//! MNRAS 444, 3926 — reference from memory) and, for the velocity covariance, Górski (1988);
//! Watkins, Feldman & Hudson (2009) use the same pair window. A zero-point offset δ of the
//! distance moduli (mag) shifts the data by δ t_i (t_i = −1/5 for η = log10(D_z/D), −1/(5 κ_η,i)
//! for velocities) and may be fitted as a free parameter.
//!
//! # Numerics
//! For a fixed σ_v, with N = diag(σ_i² + κ_i² σ_v²), the symmetric matrix
//! A = N^(−½) C̃ N^(−½) is reduced once to tridiagonal form A = Q T Qᵀ (Householder; O(N³));
//! then for any s = fσ8, C = N^(½) Q (I + s² T) Qᵀ N^(½), so ln|C| = ln|N| + ln|I + s² T| and
//! dᵀC⁻¹d = yᵀ(I + s² T)⁻¹y with y = Qᵀ N^(−½) d, both from the L D Lᵀ factors of the
//! tridiagonal I + s² T in O(N): the likelihood on a fine grid of fσ8 is cheap. The zero
//! point is profiled out in closed form (generalised least squares) at each point. With σ_v
//! fitted, one reduction is made per σ_v tried: six from 0 to 1500 km/s, then twice the
//! midpoints beside the best, then the vertex of the parabola through the best three; the
//! profile over σ_v at each fσ8 is that parabola's maximum. The 68 % interval is where the profile log-likelihood is within ½ of its
//! maximum (Wilks), found by bisection between grid points.
#![allow(clippy::needless_range_loop)] // small vectors and matrices read best with indices

use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

/// How σ_v is set.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SigmaV {
    Fixed(f64),
    Fit,
}

/// Inputs of the likelihood, all in the data's quantity.
#[derive(Debug, Clone)]
pub struct GrowthData {
    /// The data d_i (η, or km/s).
    pub values: Vec<f64>,
    /// Measurement errors σ_i.
    pub errors: Vec<f64>,
    /// κ_i = ∂d_i/∂v_i (per km/s; 1 for velocities): σ_v enters the diagonal as κ_i² σ_v².
    pub kappa: Vec<f64>,
    /// The signal covariance for fσ8 = 1, N × N, in the data's quantity.
    pub unit_covariance: DMatrix<f64>,
    /// t_i: the data's shift per magnitude of zero-point offset; `None` for no zero point.
    pub zero_point_shift: Option<Vec<f64>>,
}

/// One point of the profile likelihood.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
pub struct ProfilePoint {
    pub fsigma8: f64,
    /// Profile log-likelihood (σ_v and the zero point maximised), with all constants.
    pub log_likelihood: f64,
    /// σ_v at this fσ8 (km/s).
    pub sigma_v: f64,
}

/// The fit.
#[derive(Debug, Clone, PartialEq)]
pub struct GrowthFit {
    pub fsigma8: f64,
    /// 68 % profile-likelihood interval; `fsigma8_lo` is 0 when the interval reaches zero,
    /// `fsigma8_hi` is infinite when it reaches the top of the grid.
    pub fsigma8_lo: f64,
    pub fsigma8_hi: f64,
    pub sigma_v: f64,
    pub sigma_v_fitted: bool,
    /// Fitted zero-point offset of the distance moduli, mag.
    pub zero_point: Option<f64>,
    pub log_likelihood: f64,
    pub n_used: usize,
    pub profile: Vec<ProfilePoint>,
    /// Number of O(N³) reductions made (one per σ_v tried).
    pub diagonalisations: usize,
}

/// Highest fσ8 of the grid.
pub const FSIGMA8_GRID_MAX: f64 = 2.0;
/// Grid points of fσ8 (from 0 to [`FSIGMA8_GRID_MAX`]).
pub const FSIGMA8_GRID_POINTS: usize = 401;
/// Highest σ_v tried when it is fitted, km/s.
pub const SIGMA_V_FIT_MAX: f64 = 1500.0;
/// The σ_v (km/s) tried first when it is fitted.
const SIGMA_V_COARSE: [f64; 6] = [0.0, 150.0, 300.0, 500.0, 800.0, SIGMA_V_FIT_MAX];

/// The likelihood at one σ_v, reduced to tridiagonal form.
struct Whitened {
    sigma_v: f64,
    /// Diagonal and off-diagonal of T, A = N^(−½) C̃ N^(−½) = Q T Qᵀ.
    diag: Vec<f64>,
    off: Vec<f64>,
    /// Qᵀ N^(−½) d and Qᵀ N^(−½) t.
    y: Vec<f64>,
    t: Option<Vec<f64>>,
    log_det_noise: f64,
    n: usize,
}

impl Whitened {
    fn new(data: &GrowthData, sigma_v: f64) -> Result<Whitened, String> {
        let n = data.values.len();
        let noise: Vec<f64> = (0..n)
            .map(|i| data.errors[i].powi(2) + (data.kappa[i] * sigma_v).powi(2))
            .collect();
        if let Some(i) = noise.iter().position(|v| !(v.is_finite() && *v > 0.0)) {
            return Err(format!(
                "object {i}: the noise variance σ² + κ²σ_v² = {} is not positive",
                noise[i]
            ));
        }
        let inv_sqrt: Vec<f64> = noise.iter().map(|v| 1.0 / v.sqrt()).collect();
        let a = DMatrix::from_fn(n, n, |i, j| {
            data.unit_covariance[(i, j)] * inv_sqrt[i] * inv_sqrt[j]
        });
        let (q, diag, off) = nalgebra::linalg::SymmetricTridiagonal::new(a).unpack();
        let dw = DVector::from_fn(n, |i, _| data.values[i] * inv_sqrt[i]);
        let y = q.tr_mul(&dw);
        let t = data.zero_point_shift.as_ref().map(|t| {
            let tw = DVector::from_fn(n, |i, _| t[i] * inv_sqrt[i]);
            q.tr_mul(&tw).iter().copied().collect()
        });
        Ok(Whitened {
            sigma_v,
            diag: diag.iter().copied().collect(),
            off: off.iter().copied().collect(),
            y: y.iter().copied().collect(),
            t,
            log_det_noise: noise.iter().map(|v| v.ln()).sum(),
            n,
        })
    }

    /// Log-likelihood at fσ8 = s, with the zero point profiled; returns (ln L, zero point).
    /// M = I + s² T is factorised as L D Lᵀ (L unit lower bidiagonal), so that
    /// ln|M| = Σ ln D_i and xᵀM⁻¹x = Σ z_i²/D_i with L z = x.
    fn log_likelihood(&self, s: f64) -> (f64, Option<f64>) {
        let s2 = s * s;
        let n = self.n;
        let mut log_det = self.log_det_noise;
        let (mut yy, mut yt, mut tt) = (0.0, 0.0, 0.0);
        let (mut d_prev, mut zy_prev, mut zt_prev) = (1.0, 0.0, 0.0);
        for i in 0..n {
            let (d, l) = if i == 0 {
                (1.0 + s2 * self.diag[0], 0.0)
            } else {
                let b = s2 * self.off[i - 1];
                let l = b / d_prev;
                (1.0 + s2 * self.diag[i] - l * b, l)
            };
            if d.is_nan() || d <= 0.0 {
                return (f64::NEG_INFINITY, None);
            }
            log_det += d.ln();
            let zy = self.y[i] - l * zy_prev;
            yy += zy * zy / d;
            if let Some(t) = &self.t {
                let zt = t[i] - l * zt_prev;
                yt += zy * zt / d;
                tt += zt * zt / d;
                zt_prev = zt;
            }
            zy_prev = zy;
            d_prev = d;
        }
        let (chi2, zero) = match &self.t {
            None => (yy, None),
            Some(_) => {
                let a = if tt > 0.0 { yt / tt } else { 0.0 };
                (yy - 2.0 * a * yt + a * a * tt, Some(a))
            }
        };
        let ln2pi = (2.0 * std::f64::consts::PI).ln();
        (-0.5 * (chi2 + log_det + n as f64 * ln2pi), zero)
    }

    /// ln L on the fσ8 grid.
    fn curve(&self, grid: &[f64]) -> Vec<f64> {
        grid.iter().map(|&s| self.log_likelihood(s).0).collect()
    }
}

fn fsigma8_grid() -> Vec<f64> {
    (0..FSIGMA8_GRID_POINTS)
        .map(|i| FSIGMA8_GRID_MAX * i as f64 / (FSIGMA8_GRID_POINTS - 1) as f64)
        .collect()
}

/// Golden-section maximum of `f` on [lo, hi].
fn golden_max(f: &dyn Fn(f64) -> f64, mut lo: f64, mut hi: f64, steps: usize) -> f64 {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let mut a = hi - g * (hi - lo);
    let mut b = lo + g * (hi - lo);
    let (mut fa, mut fb) = (f(a), f(b));
    for _ in 0..steps {
        if fa > fb {
            hi = b;
            b = a;
            fb = fa;
            a = hi - g * (hi - lo);
            fa = f(a);
        } else {
            lo = a;
            a = b;
            fa = fb;
            b = lo + g * (hi - lo);
            fb = f(b);
        }
    }
    0.5 * (lo + hi)
}

/// The profile likelihood over fσ8 from the curves of several σ_v: at each fσ8 the best σ_v,
/// refined by a parabola through its neighbours in σ_v (the curves sorted by σ_v).
fn profile_over_sigma_v(curves: &[(f64, Vec<f64>)], grid: &[f64]) -> Vec<ProfilePoint> {
    let mut sorted: Vec<&(f64, Vec<f64>)> = curves.iter().collect();
    sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
    sorted.dedup_by(|a, b| a.0 == b.0);
    grid.iter()
        .enumerate()
        .map(|(g, &s)| {
            let (best, _) =
                sorted
                    .iter()
                    .enumerate()
                    .fold((0, f64::NEG_INFINITY), |acc, (i, c)| {
                        if c.1[g] > acc.1 {
                            (i, c.1[g])
                        } else {
                            acc
                        }
                    });
            let (mut sv, mut ll) = (sorted[best].0, sorted[best].1[g]);
            if best > 0 && best + 1 < sorted.len() {
                let (x0, y0) = (sorted[best - 1].0, sorted[best - 1].1[g]);
                let (x1, y1) = (sv, ll);
                let (x2, y2) = (sorted[best + 1].0, sorted[best + 1].1[g]);
                // Vertex of the parabola through the three points.
                let d = (x0 - x1) * (x0 - x2) * (x1 - x2);
                let a = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / d;
                let b = (x2 * x2 * (y0 - y1) + x1 * x1 * (y2 - y0) + x0 * x0 * (y1 - y2)) / d;
                if a < 0.0 {
                    let xv = -b / (2.0 * a);
                    if xv > x0 && xv < x2 {
                        let c = y1 - a * x1 * x1 - b * x1;
                        sv = xv;
                        ll = ll.max(a * xv * xv + b * xv + c);
                    }
                }
            }
            ProfilePoint {
                fsigma8: s,
                log_likelihood: ll,
                sigma_v: sv,
            }
        })
        .collect()
}

/// Fit fσ8 (and σ_v, and the zero point when asked). Errors when there are fewer than 3
/// objects or the inputs disagree in length.
pub fn fit_growth(data: &GrowthData, sigma_v: SigmaV) -> Result<GrowthFit, String> {
    let n = data.values.len();
    if n < 3 {
        return Err(format!("fσ8 needs at least 3 objects, got {n}"));
    }
    if data.errors.len() != n
        || data.kappa.len() != n
        || data.unit_covariance.nrows() != n
        || data.unit_covariance.ncols() != n
        || data.zero_point_shift.as_ref().is_some_and(|t| t.len() != n)
    {
        return Err("fσ8: the data, errors, κ and covariance differ in size".into());
    }
    if let Some(i) = (0..n).find(|&i| {
        !(data.values[i].is_finite() && data.errors[i].is_finite() && data.kappa[i].is_finite())
    }) {
        return Err(format!("object {i}: a value, error or κ is not finite"));
    }
    let grid = fsigma8_grid();
    let best_on = |w: &Whitened| -> (f64, f64) {
        let curve = w.curve(&grid);
        let i = argmax(&curve);
        let lo = grid[i.saturating_sub(1)];
        let hi = grid[(i + 1).min(grid.len() - 1)];
        let s = golden_max(&|s| w.log_likelihood(s).0, lo, hi, 40);
        (s, w.log_likelihood(s).0)
    };
    let mut tried: Vec<Whitened> = Vec::new();
    let (fitted, chosen) = match sigma_v {
        SigmaV::Fixed(v) => {
            if !(v.is_finite() && v >= 0.0) {
                return Err(format!(
                    "σ_v must be a non-negative number of km/s, got {v}"
                ));
            }
            tried.push(Whitened::new(data, v)?);
            (false, v)
        }
        SigmaV::Fit => {
            // A coarse set of σ_v, then twice the midpoints beside the best so far (the
            // profile is refined by parabolas through neighbouring σ_v), then the vertex.
            let score = |w: &Whitened| best_on(w).1;
            for &v in &SIGMA_V_COARSE {
                tried.push(Whitened::new(data, v)?);
            }
            for _ in 0..2 {
                let mut order: Vec<usize> = (0..tried.len()).collect();
                order.sort_by(|&a, &b| tried[a].sigma_v.total_cmp(&tried[b].sigma_v));
                let scores: Vec<f64> = order.iter().map(|&i| score(&tried[i])).collect();
                let b = argmax(&scores);
                let mut add = Vec::new();
                if b > 0 {
                    add.push(0.5 * (tried[order[b - 1]].sigma_v + tried[order[b]].sigma_v));
                }
                if b + 1 < order.len() {
                    add.push(0.5 * (tried[order[b]].sigma_v + tried[order[b + 1]].sigma_v));
                }
                for v in add {
                    tried.push(Whitened::new(data, v)?);
                }
            }
            let grid_curves: Vec<(f64, Vec<f64>)> =
                tried.iter().map(|w| (w.sigma_v, w.curve(&grid))).collect();
            let prof = profile_over_sigma_v(&grid_curves, &grid);
            let i = argmax(&prof.iter().map(|p| p.log_likelihood).collect::<Vec<_>>());
            let v = prof[i].sigma_v.clamp(0.0, SIGMA_V_FIT_MAX);
            if !tried.iter().any(|w| w.sigma_v == v) {
                tried.push(Whitened::new(data, v)?);
            }
            (true, v)
        }
    };
    let curves: Vec<(f64, Vec<f64>)> = tried.iter().map(|w| (w.sigma_v, w.curve(&grid))).collect();
    let profile = if fitted {
        profile_over_sigma_v(&curves, &grid)
    } else {
        grid.iter()
            .zip(&curves[0].1)
            .map(|(&s, &ll)| ProfilePoint {
                fsigma8: s,
                log_likelihood: ll,
                sigma_v: chosen,
            })
            .collect()
    };
    let at = tried
        .iter()
        .find(|w| w.sigma_v == chosen)
        .ok_or("internal: the chosen σ_v was not diagonalised")?;
    let (s_best, ll_best) = best_on(at);
    let zero_point = at.log_likelihood(s_best).1;
    // Interval: where the profile is within ½ of the maximum.
    let ll_max = ll_best.max(
        profile
            .iter()
            .map(|p| p.log_likelihood)
            .fold(f64::NEG_INFINITY, f64::max),
    );
    let level = ll_max - 0.5;
    let i_best = argmax(&profile.iter().map(|p| p.log_likelihood).collect::<Vec<_>>());
    let crossing = |i: usize, j: usize| -> f64 {
        // Linear interpolation of the profile between grid points i and j.
        let (a, b) = (&profile[i], &profile[j]);
        let t = (level - a.log_likelihood) / (b.log_likelihood - a.log_likelihood);
        a.fsigma8 + t.clamp(0.0, 1.0) * (b.fsigma8 - a.fsigma8)
    };
    let mut lo = 0.0;
    for i in (0..i_best).rev() {
        if profile[i].log_likelihood < level {
            lo = crossing(i, i + 1);
            break;
        }
    }
    let mut hi = f64::INFINITY;
    for i in i_best + 1..profile.len() {
        if profile[i].log_likelihood < level {
            hi = crossing(i - 1, i);
            break;
        }
    }
    Ok(GrowthFit {
        fsigma8: s_best,
        fsigma8_lo: lo.min(s_best),
        fsigma8_hi: hi.max(s_best),
        sigma_v: chosen,
        sigma_v_fitted: fitted,
        zero_point,
        log_likelihood: ll_best,
        n_used: n,
        profile,
        diagonalisations: tried.len(),
    })
}

fn argmax(v: &[f64]) -> usize {
    v.iter()
        .enumerate()
        .fold(
            (0, f64::NEG_INFINITY),
            |acc, (i, &x)| if x > acc.1 { (i, x) } else { acc },
        )
        .0
}

#[cfg(test)]
mod tests {
    use super::*;

    /// With C̃ = I (independent objects) the likelihood is that of N draws of variance
    /// s² + σ²: the maximum is at s² = mean(d²) − σ², by the textbook Gaussian variance
    /// estimate.
    #[test]
    fn independent_objects_give_the_variance_estimate() {
        let n = 200;
        // Deterministic data with mean square 4.0.
        let values: Vec<f64> = (0..n)
            .map(|i| if i % 2 == 0 { 2.0 } else { -2.0 })
            .collect();
        let data = GrowthData {
            values,
            errors: vec![1.0; n],
            kappa: vec![1.0; n],
            unit_covariance: DMatrix::identity(n, n),
            zero_point_shift: None,
        };
        let fit = fit_growth(&data, SigmaV::Fixed(0.0)).unwrap();
        assert!((fit.fsigma8 - 3f64.sqrt()).abs() < 1e-6, "{}", fit.fsigma8);
        assert!(fit.fsigma8_lo < fit.fsigma8 && fit.fsigma8 < fit.fsigma8_hi);
        // A zero point with t = 1 removes the mean; the data have mean 0, so it is 0.
        let with_zero = GrowthData {
            zero_point_shift: Some(vec![1.0; n]),
            ..data
        };
        let fit = fit_growth(&with_zero, SigmaV::Fixed(0.0)).unwrap();
        assert!(fit.zero_point.unwrap().abs() < 1e-9);
    }

    /// The tridiagonal evaluation equals the Gaussian log-density computed directly,
    /// −½ [dᵀC⁻¹d + ln|C| + N ln 2π] with C = s² C̃ + N by Cholesky (the textbook
    /// multivariate normal density), for a random positive-definite C̃, with and without
    /// the zero point (then at the GLS zero point).
    #[test]
    fn tridiagonal_likelihood_matches_a_direct_cholesky() {
        let n = 40;
        let b = DMatrix::from_fn(n, n, |i, j| ((i * 7 + j * 13) % 17) as f64 / 17.0 - 0.4);
        let c_tilde = &b * b.transpose() * 1e4;
        let values: Vec<f64> = (0..n)
            .map(|i| ((i * 5) % 11) as f64 * 30.0 - 150.0)
            .collect();
        let errors: Vec<f64> = (0..n).map(|i| 80.0 + 3.0 * i as f64).collect();
        let kappa = vec![1.0; n];
        let t: Vec<f64> = (0..n).map(|i| -0.2 / (1.0 + 0.1 * i as f64)).collect();
        for zero in [false, true] {
            let data = GrowthData {
                values: values.clone(),
                errors: errors.clone(),
                kappa: kappa.clone(),
                unit_covariance: c_tilde.clone(),
                zero_point_shift: zero.then(|| t.clone()),
            };
            let w = Whitened::new(&data, 120.0).unwrap();
            for s in [0.0, 0.3, 0.8, 1.7] {
                let (ll, a) = w.log_likelihood(s);
                let mut c = &c_tilde * (s * s);
                for i in 0..n {
                    c[(i, i)] += errors[i].powi(2) + 120.0f64.powi(2);
                }
                let ch = c.clone().cholesky().unwrap();
                let mut d = DVector::from_vec(values.clone());
                if let Some(a) = a {
                    d -= DVector::from_vec(t.clone()) * a;
                }
                let quad = d.dot(&ch.solve(&d));
                let log_det: f64 = ch.l().diagonal().iter().map(|v| 2.0 * v.ln()).sum();
                let direct = -0.5 * (quad + log_det + n as f64 * (2.0 * std::f64::consts::PI).ln());
                assert!(
                    (ll - direct).abs() < 1e-8 * direct.abs(),
                    "s={s}: {ll} vs {direct}"
                );
            }
        }
    }
}
