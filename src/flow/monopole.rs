//! The maximum-likelihood bulk flow with a monopole (zero-point) term: the model of
//! Kaiser (1988, MNRAS 231, 149; `physics::dipole_likelihood`) with one more free
//! parameter, y_n = κ_n **B**·r̂_n + δ t_n + noise, δ a zero-point offset of the distance
//! moduli in mag and t_n the data's shift per magnitude (−1/5 for η, −1/(5 κ_η,n) for
//! velocities). Weighted least squares with weights 1/(σ_n² + κ_n² σ_*²); σ_* fixed, or
//! fitted by maximising the profile likelihood (the same grid-then-golden-section search
//! over [0, 5000] km/s as the dipole-only fit).
#![allow(clippy::needless_range_loop)] // small vectors and matrices read best with indices

use nalgebra::{Matrix4, Vector4};

use crate::physics::dipole_likelihood::SigmaStar;

/// The data of the fit.
#[derive(Debug, Clone, Copy)]
pub struct MonopoleData<'a> {
    pub directions: &'a [[f64; 3]],
    pub values: &'a [f64],
    pub errors: &'a [f64],
    pub kappa: &'a [f64],
    /// t_n, the data's shift per magnitude of zero-point offset.
    pub shift: &'a [f64],
}

/// The fit.
#[derive(Debug, Clone, PartialEq)]
pub struct MonopoleFit {
    /// Flow, km/s, axes of the directions.
    pub v: [f64; 3],
    /// Zero-point offset of the distance moduli, mag.
    pub zero_point: f64,
    /// Covariance of (v_x, v_y, v_z, δ).
    pub cov: [[f64; 4]; 4],
    pub sigma_star: f64,
    pub sigma_star_fitted: bool,
    pub chi2: f64,
    pub n_used: usize,
}

struct Solution {
    p: Vector4<f64>,
    cov: Matrix4<f64>,
    log_like: f64,
    chi2: f64,
}

fn solve(d: &MonopoleData<'_>, sigma_star: f64) -> Option<Solution> {
    let mut a = Matrix4::zeros();
    let mut b = Vector4::zeros();
    let row = |n: usize| {
        let k = d.kappa[n];
        let r = d.directions[n];
        Vector4::new(k * r[0], k * r[1], k * r[2], d.shift[n])
    };
    let var = |n: usize| d.errors[n].powi(2) + (d.kappa[n] * sigma_star).powi(2);
    for n in 0..d.values.len() {
        let x = row(n);
        let w = 1.0 / var(n);
        a += x * x.transpose() * w;
        b += x * (w * d.values[n]);
    }
    let cov = a.try_inverse()?;
    let p = cov * b;
    let (mut chi2, mut log_like) = (0.0, 0.0);
    for n in 0..d.values.len() {
        let res = d.values[n] - row(n).dot(&p);
        let v = var(n);
        chi2 += res * res / v;
        log_like -= 0.5 * (v.ln() + res * res / v);
    }
    Some(Solution {
        p,
        cov,
        log_like,
        chi2,
    })
}

/// Fit the flow and the zero point. Errors with fewer than 5 objects, or when the directions
/// and shifts do not determine the four parameters.
pub fn fit_flow_with_monopole(
    d: &MonopoleData<'_>,
    sigma_star: SigmaStar,
) -> Result<MonopoleFit, String> {
    let n = d.values.len();
    if n < 5 {
        return Err(format!(
            "a bulk flow with a monopole needs at least 5 objects, got {n}"
        ));
    }
    let (s, fitted) = match sigma_star {
        SigmaStar::Fixed(s) => (s, false),
        SigmaStar::Fit => {
            let ll = |s: f64| solve(d, s).map(|x| x.log_like).unwrap_or(f64::NEG_INFINITY);
            let grid: Vec<f64> = (0..=100).map(|i| 50.0 * i as f64).collect();
            let best = grid
                .iter()
                .copied()
                .fold((0.0, f64::NEG_INFINITY), |acc, s| {
                    let v = ll(s);
                    if v > acc.1 {
                        (s, v)
                    } else {
                        acc
                    }
                })
                .0;
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
            (0.5 * (lo + hi), true)
        }
    };
    let sol = solve(d, s)
        .ok_or("the directions and zero-point shifts do not determine a flow and a monopole")?;
    let m = sol.cov;
    Ok(MonopoleFit {
        v: [sol.p[0], sol.p[1], sol.p[2]],
        zero_point: sol.p[3],
        cov: std::array::from_fn(|i| std::array::from_fn(|j| m[(i, j)])),
        sigma_star: s,
        sigma_star_fitted: fitted,
        chi2: sol.chi2,
        n_used: n,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Noise-free data from a known flow and zero point are recovered exactly (least
    /// squares on a model it contains).
    #[test]
    fn recovers_flow_and_zero_point() {
        let n = 60;
        let dirs: Vec<[f64; 3]> = (0..n)
            .map(|i| {
                let z = -1.0 + 2.0 * (i as f64 + 0.5) / n as f64;
                let t = 2.4 * i as f64;
                let r = (1.0 - z * z).sqrt();
                [r * t.cos(), r * t.sin(), z]
            })
            .collect();
        let kappa: Vec<f64> = (0..n).map(|i| 1e-4 * (1.0 + 0.01 * i as f64)).collect();
        let shift = vec![-0.2; n];
        let truth = [250.0, -80.0, 40.0];
        let zp = 0.07;
        let values: Vec<f64> = (0..n)
            .map(|i| kappa[i] * (0..3).map(|a| dirs[i][a] * truth[a]).sum::<f64>() + zp * shift[i])
            .collect();
        let errors = vec![0.02; n];
        let fit = fit_flow_with_monopole(
            &MonopoleData {
                directions: &dirs,
                values: &values,
                errors: &errors,
                kappa: &kappa,
                shift: &shift,
            },
            SigmaStar::Fixed(0.0),
        )
        .unwrap();
        for a in 0..3 {
            assert!((fit.v[a] - truth[a]).abs() < 1e-6, "{:?}", fit.v);
        }
        assert!((fit.zero_point - zp).abs() < 1e-10);
    }
}
