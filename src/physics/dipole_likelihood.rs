//! Maximum-likelihood bulk flow of radial peculiar velocities.
//!
//! Source: Kaiser (1988), MNRAS 231, 149: with radial velocities u_n in directions r̂_n,
//! errors σ_n and an intrinsic (nonlinear) dispersion σ_*, the likelihood of a uniform flow
//! **B** is maximised by B_i = A⁻¹_ij Σ_n w_n r̂_n,j u_n, A_ij = Σ_n w_n r̂_n,i r̂_n,j,
//! w_n = 1/(σ_n² + σ_*²), and A⁻¹ is the noise covariance of **B**. The same weighted least
//! squares serves any data linear in the flow: y_n = κ_n **B**·r̂_n + noise, with κ_n = 1 for
//! velocities and κ_n = ∂η/∂v at v = 0 for log-distance ratios; the noise variance is then
//! σ_n² + κ_n² σ_*². The ML weights w_in, B_i = Σ_n w_in y_n, are what the window function
//! of the measured flow is made of (Watkins, Feldman & Hudson 2009, MNRAS 392, 743).
//!
//! σ_* can be fixed or fitted: the profile likelihood (B re-solved at each σ_*) is
//! maximised over σ_* ∈ [0, 5000] km/s by golden-section search on a bracket found on a grid.

use nalgebra::{Matrix3, Vector3};
use serde::Serialize;

use super::constants::C_KM_S;
use super::cosmology::Cosmology;

/// How σ_* is set.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SigmaStar {
    Fixed(f64),
    Fit,
}

/// A fitted flow, in the axes of the input directions (Galactic for flowsift).
#[derive(Debug, Clone, Serialize)]
pub struct BulkFlowFit {
    /// Flow vector, km/s.
    pub v: [f64; 3],
    /// Noise covariance of `v`, (km/s)².
    pub cov: [[f64; 3]; 3],
    pub sigma_star: f64,
    /// Whether σ_* was fitted.
    pub sigma_star_fitted: bool,
    pub n_used: usize,
    /// χ² of the data about the fitted flow, with the fitted or fixed σ_*.
    pub chi2: f64,
    /// ML weights per object: B_i = Σ_n weights[n][i] y_n.
    #[serde(skip)]
    pub weights: Vec<[f64; 3]>,
}

/// Inputs of the fit: directions (unit vectors), data, errors and κ per object.
#[derive(Debug, Clone, Copy)]
pub struct FlowData<'a> {
    pub directions: &'a [[f64; 3]],
    pub values: &'a [f64],
    pub errors: &'a [f64],
    pub kappa: &'a [f64],
}

struct Solution {
    v: Vector3<f64>,
    a_inv: Matrix3<f64>,
    log_like: f64,
    chi2: f64,
}

fn solve(data: &FlowData<'_>, sigma_star: f64) -> Option<Solution> {
    let mut a = Matrix3::zeros();
    let mut b = Vector3::zeros();
    for n in 0..data.values.len() {
        let k = data.kappa[n];
        let var = data.errors[n].powi(2) + (k * sigma_star).powi(2);
        let r = Vector3::from(data.directions[n]);
        let w = 1.0 / var;
        a += r * r.transpose() * (w * k * k);
        b += r * (w * k * data.values[n]);
    }
    let a_inv = a.try_inverse()?;
    let v = a_inv * b;
    let (mut log_like, mut chi2) = (0.0, 0.0);
    for n in 0..data.values.len() {
        let k = data.kappa[n];
        let var = data.errors[n].powi(2) + (k * sigma_star).powi(2);
        let r = Vector3::from(data.directions[n]);
        let res = data.values[n] - k * v.dot(&r);
        chi2 += res * res / var;
        log_like -= 0.5 * (var.ln() + res * res / var);
    }
    Some(Solution {
        v,
        a_inv,
        log_like,
        chi2,
    })
}

/// Fit the flow. Errors when fewer than 4 objects, or when the directions do not span
/// three dimensions.
pub fn fit_bulk_flow(data: &FlowData<'_>, sigma_star: SigmaStar) -> Result<BulkFlowFit, String> {
    let n = data.values.len();
    if n < 4 {
        return Err(format!("a bulk flow needs at least 4 objects, got {n}"));
    }
    if data.errors.iter().any(|e| !(e.is_finite() && *e > 0.0))
        && matches!(sigma_star, SigmaStar::Fixed(s) if s <= 0.0)
    {
        return Err("every object needs a positive error when sigma_star is 0".into());
    }
    let (s, fitted) = match sigma_star {
        SigmaStar::Fixed(s) => (s, false),
        SigmaStar::Fit => (fit_sigma_star(data)?, true),
    };
    let sol = solve(data, s)
        .ok_or("the directions do not span three dimensions: the flow is not determined")?;
    let weights = (0..n)
        .map(|i| {
            let k = data.kappa[i];
            let var = data.errors[i].powi(2) + (k * s).powi(2);
            let w = sol.a_inv * Vector3::from(data.directions[i]) * (k / var);
            [w.x, w.y, w.z]
        })
        .collect();
    let m = sol.a_inv;
    Ok(BulkFlowFit {
        v: [sol.v.x, sol.v.y, sol.v.z],
        cov: [
            [m[(0, 0)], m[(0, 1)], m[(0, 2)]],
            [m[(1, 0)], m[(1, 1)], m[(1, 2)]],
            [m[(2, 0)], m[(2, 1)], m[(2, 2)]],
        ],
        sigma_star: s,
        sigma_star_fitted: fitted,
        n_used: n,
        chi2: sol.chi2,
        weights,
    })
}

/// Maximise the profile likelihood over σ_*.
fn fit_sigma_star(data: &FlowData<'_>) -> Result<f64, String> {
    let ll = |s: f64| {
        solve(data, s)
            .map(|x| x.log_like)
            .unwrap_or(f64::NEG_INFINITY)
    };
    // Bracket on a grid, then golden section.
    let grid: Vec<f64> = (0..=100).map(|i| 50.0 * i as f64).collect();
    let (best, _) = grid
        .iter()
        .map(|s| (*s, ll(*s)))
        .fold(
            (0.0, f64::NEG_INFINITY),
            |acc, x| if x.1 > acc.1 { x } else { acc },
        );
    let (mut lo, mut hi) = ((best - 50.0).max(0.0), (best + 50.0).min(5000.0));
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..60 {
        let a = hi - g * (hi - lo);
        let b = lo + g * (hi - lo);
        if ll(a) > ll(b) {
            hi = b;
        } else {
            lo = a;
        }
    }
    let s = 0.5 * (lo + hi);
    if !ll(s).is_finite() {
        return Err("the likelihood could not be evaluated: check the errors".into());
    }
    Ok(s)
}

/// κ = ∂η/∂v at v = 0 for an object at CMB-frame redshift z: with
/// η = log10(D_C(z)/D_C(z_cos)) and 1 + z_cos = (1 + z)/(1 + z_pec), dz_pec/dv = 1/c at 0, so
/// κ = (1 + z) D_H / (E(z) D_C(z) c ln 10)  [per km/s].
pub fn eta_per_velocity(cosmology: &Cosmology, z_cmb: f64) -> Option<f64> {
    let dc = cosmology.comoving_distance(z_cmb).ok()?;
    Some(
        (1.0 + z_cmb) * cosmology.hubble_distance()
            / (cosmology.efunc(z_cmb) * dc * C_KM_S * std::f64::consts::LN_10),
    )
}

/// Amplitude, Galactic (l, b) in degrees, and the first-order amplitude error of a vector
/// with covariance `cov`.
pub fn amplitude_direction(v: [f64; 3], cov: [[f64; 3]; 3]) -> (f64, f64, f64, f64) {
    let vv = Vector3::from(v);
    let amp = vv.norm();
    let (mut l, b) = if amp > 0.0 {
        (
            v[1].atan2(v[0]).to_degrees(),
            (v[2] / amp).clamp(-1.0, 1.0).asin().to_degrees(),
        )
    } else {
        (0.0, 0.0)
    };
    if l < 0.0 {
        l += 360.0;
    }
    let c = Matrix3::from_fn(|i, j| cov[i][j]);
    let err = if amp > 0.0 {
        let u = vv / amp;
        (u.transpose() * c * u)[(0, 0)].sqrt()
    } else {
        f64::NAN
    };
    (amp, l, b, err)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Noise-free data from a known flow is recovered exactly; the covariance is the inverse
    /// of Σ w r̂ r̂ᵀ (Kaiser 1988).
    #[test]
    fn recovers_exact_flow() {
        let dirs: Vec<[f64; 3]> = (0..50)
            .map(|i| {
                let t = i as f64 * 0.7;
                let z = -1.0 + 2.0 * (i as f64 + 0.5) / 50.0;
                let r = (1.0 - z * z).sqrt();
                [r * t.cos(), r * t.sin(), z]
            })
            .collect();
        let truth = [300.0, -120.0, 45.0];
        let values: Vec<f64> = dirs
            .iter()
            .map(|d| d[0] * truth[0] + d[1] * truth[1] + d[2] * truth[2])
            .collect();
        let errors = vec![100.0; 50];
        let kappa = vec![1.0; 50];
        let fit = fit_bulk_flow(
            &FlowData {
                directions: &dirs,
                values: &values,
                errors: &errors,
                kappa: &kappa,
            },
            SigmaStar::Fixed(0.0),
        )
        .unwrap();
        for (v, t) in fit.v.iter().zip(truth) {
            assert!((v - t).abs() < 1e-9);
        }
        // Weights reproduce the estimate.
        let b0: f64 = fit.weights.iter().zip(&values).map(|(w, y)| w[0] * y).sum();
        assert!((b0 - fit.v[0]).abs() < 1e-9);
        // Isotropic-ish sample: variance ≈ 3σ²/N per component.
        assert!((fit.cov[0][0] / (3.0 * 100.0 * 100.0 / 50.0) - 1.0).abs() < 0.2);
    }

    #[test]
    fn too_few_objects() {
        let d = [[1.0, 0.0, 0.0]; 3];
        let e = FlowData {
            directions: &d,
            values: &[1.0; 3],
            errors: &[1.0; 3],
            kappa: &[1.0; 3],
        };
        assert!(fit_bulk_flow(&e, SigmaStar::Fixed(0.0)).is_err());
    }
}
