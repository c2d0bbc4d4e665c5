//! Quadrature in ln k: the range and resolution of the σ(R) / top-hat integrals,
//! composite Gauss–Legendre nodes, and Simpson weights.

use crate::physics::cosmology::gauss_legendre;

/// Range and resolution of the σ(R) / top-hat quadrature.
pub(super) const QUAD_K_MIN: f64 = 1e-7;
pub(super) const QUAD_K_MAX: f64 = 1e3;
pub(super) const QUAD_PANEL_LNK: f64 = 0.02;
pub(super) const QUAD_GL_POINTS: usize = 8;

/// Composite Gauss–Legendre nodes on [ln k_lo, ln k_hi], panels no wider than `panel`, and
/// weights for ∫ g(k) dk ≈ Σ w_i g(k_i) (the Jacobian k is folded into w).
pub(super) fn lnk_nodes(k_lo: f64, k_hi: f64, panel: f64, points: usize) -> (Vec<f64>, Vec<f64>) {
    let (x, w) = gauss_legendre(points);
    let (u0, u1) = (k_lo.ln(), k_hi.ln());
    let n_panels = (((u1 - u0) / panel).ceil() as usize).max(1);
    let width = (u1 - u0) / n_panels as f64;
    let mut ks = Vec::with_capacity(n_panels * points);
    let mut ws = Vec::with_capacity(n_panels * points);
    for p in 0..n_panels {
        let mid = u0 + (p as f64 + 0.5) * width;
        for (xi, wi) in x.iter().zip(&w) {
            let k = (mid + 0.5 * width * xi).exp();
            ks.push(k);
            ws.push(0.5 * width * wi * k);
        }
    }
    (ks, ws)
}

/// Simpson weights on a uniform grid of `n` (odd) points with spacing `h`.
pub(super) fn simpson_weights(n: usize, h: f64) -> Vec<f64> {
    debug_assert!(n >= 3 && n % 2 == 1);
    (0..n)
        .map(|i| {
            let c = if i == 0 || i == n - 1 {
                1.0
            } else if i % 2 == 1 {
                4.0
            } else {
                2.0
            };
            c * h / 3.0
        })
        .collect()
}
#[cfg(test)]
mod tests {
    use super::*;

    /// Simpson weights integrate x³ exactly.
    #[test]
    fn simpson_is_exact_for_cubics() {
        let n = 11;
        let h = 0.3;
        let w = simpson_weights(n, h);
        let s: f64 = (0..n).map(|i| w[i] * (i as f64 * h).powi(3)).sum();
        let exact = (h * (n - 1) as f64).powi(4) / 4.0;
        assert!((s / exact - 1.0).abs() < 1e-14);
    }
}
