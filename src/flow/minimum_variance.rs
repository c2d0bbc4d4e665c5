//! Minimum-variance (MV) bulk-flow moments: Watkins, Feldman & Hudson (2009), MNRAS 392,
//! 743, arXiv:0809.4041.
//!
//! The MV moments u_i = Σ_n w_in y_n of data y_n = κ_n v_n + ε_n (κ_n = ∂y/∂v; 1 for
//! velocities) estimate the bulk flow U_i that an *ideal survey* would measure: N′ points
//! isotropic on the sky with the Gaussian radial number density n(r) ∝ exp(−r²/2R_I²), each
//! weighted w′_in′ = 3 r̂_n′,i / N′ (the maximum-likelihood weights of an isotropic sample).
//! The weights minimise ⟨(u_i − U_i)²⟩ subject to Σ_n w_in κ_n r̂_n,j = δ_ij (a pure bulk
//! flow is recovered exactly). With G_nm = ⟨y_n y_m⟩ = κ_n κ_m ⟨v_n v_m⟩ + δ_nm(σ_n² + κ_n² σ_*²),
//! Q_in = ⟨U_i y_n⟩ = κ_n Σ_n′ w′_in′ ⟨v_n′ v_n⟩, R_nj = κ_n r̂_n,j and M = Rᵀ G⁻¹ R, the
//! Lagrange solution is
//!   w_i = G⁻¹ [Q_i − R M⁻¹ (Rᵀ G⁻¹ Q_i − e_i)]
//! (derived here from the constrained minimum; WFH09 write the same solution with the
//! Lagrange multipliers λ_ij explicit). The velocity correlations ⟨v v⟩ are those of linear
//! theory ([`RadialVelocityCorrelation`]).
//!
//! Reported: the moments, their noise covariance R^ε_ij = Σ_n w_in w_jn (σ_n² + κ_n² σ_*²),
//! their cosmic-variance covariance R^v_ij = Σ_nm w_in w_jm G^v_nm, the ΛCDM expectation of the
//! ideal window ⟨U_i U_j⟩ = Σ w′ w′ ⟨v′ v′⟩, and the variance of the mismatch
//! ⟨(u − U)_i (u − U)_j⟩ = w_iᵀ G w_j − w_iᵀ Q_j − w_jᵀ Q_i + ⟨U_i U_j⟩.
#![allow(clippy::needless_range_loop)] // small vectors and matrices read best with indices

use nalgebra::{DMatrix, DVector, Matrix3};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

use crate::physics::power::RadialVelocityCorrelation;

/// The objects of the MV moments, in h⁻¹ Mpc and the data's quantity.
#[derive(Debug, Clone, Copy)]
pub struct MvObjects<'a> {
    pub positions: &'a [[f64; 3]],
    /// κ_n = ∂y/∂v.
    pub kappa: &'a [f64],
    /// Measurement errors σ_n of y.
    pub errors: &'a [f64],
    /// Nonlinear dispersion σ_*, km/s.
    pub sigma_star: f64,
}

/// The ideal survey: N′ points with Gaussian radial density of scale `radius` (h⁻¹ Mpc),
/// drawn with a seeded generator (positions = radius × a 3-D standard normal vector, whose
/// density ∝ exp(−r²/2R²) is exactly the profile).
pub fn ideal_survey(radius: f64, points: usize, seed: u64) -> Vec<[f64; 3]> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut out = Vec::with_capacity(points);
    while out.len() < points {
        let g: [f64; 3] = [
            StandardNormal.sample(&mut rng),
            StandardNormal.sample(&mut rng),
            StandardNormal.sample(&mut rng),
        ];
        let r2 = g[0] * g[0] + g[1] * g[1] + g[2] * g[2];
        if r2 > 1e-12 {
            out.push([radius * g[0], radius * g[1], radius * g[2]]);
        }
    }
    out
}

/// Ideal-survey weights w′_in′ = 3 r̂_n′,i / N′.
pub fn ideal_weights(points: &[[f64; 3]]) -> Vec<[f64; 3]> {
    let n = points.len() as f64;
    points
        .iter()
        .map(|p| {
            let r = (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt();
            [
                3.0 * p[0] / (r * n),
                3.0 * p[1] / (r * n),
                3.0 * p[2] / (r * n),
            ]
        })
        .collect()
}

/// The MV weights and the covariances of the moments.
#[derive(Debug, Clone)]
pub struct MvMoments {
    /// w_in: moments u_i = Σ_n weights[n][i] y_n.
    pub weights: Vec<[f64; 3]>,
    pub noise_cov: [[f64; 3]; 3],
    pub cosmic_cov: [[f64; 3]; 3],
    /// ⟨U_i U_j⟩ of the ideal window in linear theory.
    pub ideal_cov: [[f64; 3]; 3],
    /// ⟨(u − U)_i (u − U)_j⟩.
    pub mismatch_cov: [[f64; 3]; 3],
}

impl MvMoments {
    /// u_i = Σ_n w_in y_n.
    pub fn apply(&self, y: &[f64]) -> [f64; 3] {
        let mut u = [0.0; 3];
        for (w, v) in self.weights.iter().zip(y) {
            for i in 0..3 {
                u[i] += w[i] * v;
            }
        }
        u
    }
}

/// The MV weights for `objects` and the ideal survey `ideal` (points, h⁻¹ Mpc), with the
/// velocity correlations of `correlation` (which must cover every pair of both sets).
pub fn minimum_variance_weights(
    objects: &MvObjects<'_>,
    ideal: &[[f64; 3]],
    correlation: &RadialVelocityCorrelation,
) -> Result<MvMoments, String> {
    let n = objects.positions.len();
    if n < 4 {
        return Err(format!(
            "minimum-variance moments need at least 4 objects, got {n}"
        ));
    }
    if objects.kappa.len() != n || objects.errors.len() != n {
        return Err("minimum-variance moments: positions, κ and errors differ in size".into());
    }
    let pos = objects.positions;
    let kappa = objects.kappa;
    let var = correlation.variance();
    // Signal part of G (data space).
    let signal: Vec<f64> = (0..n)
        .into_par_iter()
        .flat_map_iter(|i| {
            (0..n).map(move |j| {
                let c = if i == j {
                    var
                } else {
                    correlation.between(pos[i], pos[j])
                };
                kappa[i] * kappa[j] * c
            })
        })
        .collect();
    let g_signal = DMatrix::from_row_slice(n, n, &signal);
    let noise: Vec<f64> = (0..n)
        .map(|i| objects.errors[i].powi(2) + (kappa[i] * objects.sigma_star).powi(2))
        .collect();
    if let Some(i) = noise.iter().position(|v| !(v.is_finite() && *v > 0.0)) {
        return Err(format!("object {i}: the noise variance is not positive"));
    }
    let mut g = g_signal.clone();
    for i in 0..n {
        g[(i, i)] += noise[i];
    }
    let wp = ideal_weights(ideal);
    // Q_in = κ_n Σ_n′ w′_in′ ⟨v_n′ v_n⟩.
    let q_rows: Vec<[f64; 3]> = (0..n)
        .into_par_iter()
        .map(|m| {
            let mut q = [0.0; 3];
            for (p, w) in ideal.iter().zip(&wp) {
                let c = correlation.between(*p, pos[m]);
                for i in 0..3 {
                    q[i] += w[i] * c;
                }
            }
            [kappa[m] * q[0], kappa[m] * q[1], kappa[m] * q[2]]
        })
        .collect();
    let q = DMatrix::from_fn(n, 3, |m, i| q_rows[m][i]);
    let r = DMatrix::from_fn(n, 3, |m, j| {
        let p = pos[m];
        let norm = (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt();
        kappa[m] * p[j] / norm
    });
    let chol = g
        .clone()
        .cholesky()
        .ok_or("the data covariance (ΛCDM signal + noise) is not positive definite")?;
    let g_inv_q = chol.solve(&q);
    let g_inv_r = chol.solve(&r);
    let m = r.tr_mul(&g_inv_r);
    let m3 = Matrix3::from_fn(|i, j| m[(i, j)]);
    let m_inv = m3
        .try_inverse()
        .ok_or("the directions do not span three dimensions: the moments are not determined")?;
    let rt_g_inv_q = r.tr_mul(&g_inv_q); // 3×3: (Rᵀ G⁻¹ Q)_{j i}
                                         // w_i = G⁻¹ Q_i − G⁻¹ R M⁻¹ (Rᵀ G⁻¹ Q_i − e_i)
    let mut w = DMatrix::zeros(n, 3);
    for i in 0..3 {
        let c = DVector::from_fn(3, |j, _| {
            rt_g_inv_q[(j, i)] - if j == i { 1.0 } else { 0.0 }
        });
        let lam = DVector::from_fn(3, |j, _| (0..3).map(|k| m_inv[(j, k)] * c[k]).sum::<f64>());
        let col = g_inv_q.column(i) - &g_inv_r * lam;
        w.set_column(i, &col);
    }
    // Covariances.
    let mut noise_cov = [[0.0; 3]; 3];
    let gs_w = &g_signal * &w;
    let g_w = &g * &w;
    let mut cosmic_cov = [[0.0; 3]; 3];
    let mut wgw = [[0.0; 3]; 3];
    let mut wq = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            noise_cov[i][j] = (0..n).map(|k| w[(k, i)] * w[(k, j)] * noise[k]).sum();
            cosmic_cov[i][j] = (0..n).map(|k| w[(k, i)] * gs_w[(k, j)]).sum();
            wgw[i][j] = (0..n).map(|k| w[(k, i)] * g_w[(k, j)]).sum();
            wq[i][j] = (0..n).map(|k| w[(k, i)] * q[(k, j)]).sum();
        }
    }
    let ideal_cov = ideal_window_covariance(ideal, &wp, correlation);
    let mut mismatch_cov = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            mismatch_cov[i][j] = wgw[i][j] - wq[i][j] - wq[j][i] + ideal_cov[i][j];
        }
    }
    Ok(MvMoments {
        weights: (0..n).map(|k| [w[(k, 0)], w[(k, 1)], w[(k, 2)]]).collect(),
        noise_cov,
        cosmic_cov,
        ideal_cov,
        mismatch_cov,
    })
}

/// ⟨U_i U_j⟩ = Σ_ab w′_ia w′_jb ⟨v_a v_b⟩ over the ideal survey (self pairs included).
pub fn ideal_window_covariance(
    ideal: &[[f64; 3]],
    weights: &[[f64; 3]],
    correlation: &RadialVelocityCorrelation,
) -> [[f64; 3]; 3] {
    let var = correlation.variance();
    let rows: Vec<[[f64; 3]; 3]> = (0..ideal.len())
        .into_par_iter()
        .map(|a| {
            let mut g = [0.0; 3];
            for (b, (p, w)) in ideal.iter().zip(weights).enumerate() {
                let c = if a == b {
                    var
                } else {
                    correlation.between(ideal[a], *p)
                };
                for j in 0..3 {
                    g[j] += w[j] * c;
                }
            }
            let mut m = [[0.0; 3]; 3];
            for i in 0..3 {
                for j in 0..3 {
                    m[i][j] = weights[a][i] * g[j];
                }
            }
            m
        })
        .collect();
    let mut total = [[0.0; 3]; 3];
    for m in &rows {
        for i in 0..3 {
            for j in 0..3 {
                total[i][j] += m[i][j];
            }
        }
    }
    total
}
