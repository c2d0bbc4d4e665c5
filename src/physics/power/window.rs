//! The bulk-flow window W²_ij(k) of a weighted sample, the expected linear-theory
//! covariance of its bulk-flow estimate, and the same covariance summed by pair separation
//! (`SeparationTable`).

use std::f64::consts::PI;

use rayon::prelude::*;

use super::bessel::{
    horner, sin_cos_fast, sin_cos_reduced, J1_OVER_X, J2_OVER_X2, SIN_COS_REDUCED_MAX,
};
use super::quadrature::{lnk_nodes, simpson_weights, QUAD_GL_POINTS, QUAD_K_MAX, QUAD_PANEL_LNK};
use super::spectrum::LinearPower;
use super::H0_KM_S_PER_MPC_H;
use crate::physics::cosmology::gauss_legendre;

/// Smallest wavenumber (h Mpc⁻¹) of the k grid of [`lcdm_bulk_flow_covariance`].
pub const BULK_FLOW_K_MIN: f64 = 1e-4;
/// Largest wavenumber (h Mpc⁻¹) of the k grid of [`lcdm_bulk_flow_covariance`].
pub const BULK_FLOW_K_MAX: f64 = 2.0;
/// Number of log-spaced points of that grid (odd, for Simpson's rule).
pub const BULK_FLOW_K_POINTS: usize = 241;

/// Per-object data of the pair sum.
#[derive(Clone, Copy)]
struct Obj {
    r: [f64; 3],
    u: [f64; 3],
    w: [f64; 3],
}

/// The pair sums' per-object data: position, direction and weights.
///
/// # Panics
/// If `positions` and `weights` differ in length (`caller` names the function).
fn objects(caller: &str, positions: &[[f64; 3]], weights: &[[f64; 3]]) -> Vec<Obj> {
    assert_eq!(
        positions.len(),
        weights.len(),
        "{caller}: one weight triple per position"
    );
    positions
        .iter()
        .zip(weights)
        .map(|(r, w)| {
            let norm = dot(r, r).sqrt();
            Obj {
                r: *r,
                u: [r[0] / norm, r[1] / norm, r[2] / norm],
                w: *w,
            }
        })
        .collect()
}

#[inline(always)]
fn dot(a: &[f64; 3], b: &[f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// Górski's kernel f_mn(k) for a pair with separation `sep`, cos α = `cos_a`, and
/// pp = (r̂_n·A)(r̂_m·A) (A = r_n − r_m), in the form
/// f = cos α · j1(x)/x − k² pp · j2(x)/x², x = kA,
/// which equals (1/3) cos α [j0 − 2 j2] + j2 r_n r_m sin²α / A² (j0 + j2 = 3 j1/x and
/// (r̂_n·A)(r̂_m·A) = A² cos α − r_n r_m sin²α) and stays finite as A → 0. `pp_a2` = pp/A².
#[inline(always)]
fn gorski_kernel(k: f64, sep: f64, cos_a: f64, pp: f64, pp_a2: f64) -> f64 {
    if k * sep < 1.0 {
        kernel_series(k, sep, cos_a, pp)
    } else {
        let x = k * sep;
        let (s, c) = sin_cos_fast(x);
        kernel_closed(x, 1.0 / x, s, c, cos_a, pp_a2)
    }
}

/// The kernel from the power series of j1/x and j2/x² (x = k·sep < 1).
#[inline(always)]
fn kernel_series(k: f64, sep: f64, cos_a: f64, pp: f64) -> f64 {
    let x = k * sep;
    let y = x * x;
    cos_a * horner(&J1_OVER_X, y) - k * k * pp * horner(&J2_OVER_X2, y)
}

/// The kernel from the closed forms (x ≥ 1), given sin x, cos x and 1/x:
/// [cos α (sin x − x cos x) − (pp/A²)((3 − x²) sin x − 3x cos x)] / x³.
#[inline(always)]
fn kernel_closed(x: f64, inv_x: f64, s: f64, c: f64, cos_a: f64, pp_a2: f64) -> f64 {
    let xc = x * c;
    (cos_a * (s - xc) - pp_a2 * ((3.0 - x * x) * s - 3.0 * xc)) * (inv_x * inv_x * inv_x)
}

/// Index pairs (i, j), i ≤ j, of the six independent entries of a symmetric 3×3 matrix.
const SYM: [(usize, usize); 6] = [(0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2)];

/// Row ranges of the upper-triangle pair sum with about equal pair counts.
fn pair_blocks(n: usize, n_blocks: usize) -> Vec<(usize, usize)> {
    let total = n * n.saturating_sub(1) / 2;
    let target = total.div_ceil(n_blocks.max(1)).max(1);
    let mut blocks = Vec::new();
    let (mut start, mut count) = (0usize, 0usize);
    for row in 0..n {
        count += n - 1 - row;
        if count >= target {
            blocks.push((start, row + 1));
            start = row + 1;
            count = 0;
        }
    }
    if start < n {
        blocks.push((start, n));
    }
    blocks
}

/// Sum over the pairs (a, b), a in `rows`, b > a, of S_ij f_ab(k), S_ij = w_ia w_jb + w_ja w_ib,
/// computed as Σ_a (w_ia G_aj + w_ja G_ai) with G_aj(k) = Σ_{b>a} w_jb f_ab(k).
/// Layout: entry c (of SYM) at k index l is `acc[c * nk + l]`. With `k` ascending, each
/// pair's k loop splits at k = 1/A into a series part and a closed-form part, both without
/// branches.
fn block_pair_sum(objs: &[Obj], rows: (usize, usize), k: &[f64], ascending: bool) -> Vec<f64> {
    let nk = k.len();
    let k_max = k.iter().fold(0.0_f64, |m, &v| m.max(v.abs()));
    let inv_k: Vec<f64> = k.iter().map(|&v| 1.0 / v).collect();
    let mut acc = vec![0.0; 6 * nk];
    let mut g = vec![0.0; 3 * nk];
    for a in rows.0..rows.1 {
        let oa = &objs[a];
        g.iter_mut().for_each(|v| *v = 0.0);
        let (g0, rest) = g.split_at_mut(nk);
        let (g1, g2) = rest.split_at_mut(nk);
        for ob in &objs[a + 1..] {
            let d = [oa.r[0] - ob.r[0], oa.r[1] - ob.r[1], oa.r[2] - ob.r[2]];
            let sep2 = dot(&d, &d);
            let sep = sep2.sqrt();
            let cos_a = dot(&oa.u, &ob.u);
            let pp = dot(&oa.u, &d) * dot(&ob.u, &d);
            let pp_a2 = if sep2 > 0.0 { pp / sep2 } else { 0.0 };
            let [w0, w1, w2] = ob.w;
            if ascending && k_max * sep < SIN_COS_REDUCED_MAX {
                let inv_sep = 1.0 / sep;
                let split = k.partition_point(|&kk| kk * sep < 1.0);
                for l in 0..split {
                    let f = kernel_series(k[l], sep, cos_a, pp);
                    g0[l] += w0 * f;
                    g1[l] += w1 * f;
                    g2[l] += w2 * f;
                }
                for l in split..nk {
                    let x = k[l] * sep;
                    let (s, c) = sin_cos_reduced(x);
                    let f = kernel_closed(x, inv_k[l] * inv_sep, s, c, cos_a, pp_a2);
                    g0[l] += w0 * f;
                    g1[l] += w1 * f;
                    g2[l] += w2 * f;
                }
            } else {
                for l in 0..nk {
                    let f = gorski_kernel(k[l], sep, cos_a, pp, pp_a2);
                    g0[l] += w0 * f;
                    g1[l] += w1 * f;
                    g2[l] += w2 * f;
                }
            }
        }
        let gs: [&[f64]; 3] = [g0, g1, g2];
        for (c, &(i, j)) in SYM.iter().enumerate() {
            let (wi, wj) = (oa.w[i], oa.w[j]);
            let (gi, gj) = (gs[i], gs[j]);
            for (l, al) in acc[c * nk..(c + 1) * nk].iter_mut().enumerate() {
                *al += wi * gj[l] + wj * gi[l];
            }
        }
    }
    acc
}

/// Self-pair part of the window: f_nn = 1/3 at every k, so Σ_n w_in w_jn / 3.
fn self_window(weights: &[[f64; 3]]) -> [[f64; 3]; 3] {
    let mut m = [[0.0; 3]; 3];
    for w in weights {
        for i in 0..3 {
            for j in 0..3 {
                m[i][j] += w[i] * w[j] / 3.0;
            }
        }
    }
    m
}

/// The bulk-flow window W²_ij(k) = Σ_n Σ_m w_in w_jm f_mn(k) (Watkins, Feldman & Hudson
/// 2009, arXiv:0809.4041) of objects at `positions` (h⁻¹ Mpc, observer at the origin) whose
/// bulk-flow components are estimated as u_i = Σ_n w_in v_n from radial velocities v_n;
/// `weights[n] = [w_0n, w_1n, w_2n]`. One 3×3 symmetric matrix per entry of `k` (h Mpc⁻¹).
///
/// f_mn is Górski's (1988) angle-averaged radial-velocity kernel,
/// f_mn(k) = ∫ d²k̂/4π (r̂_n·k̂)(r̂_m·k̂) e^{ik·(r_n − r_m)}
///         = (1/3) cos α [j0(kA) − 2 j2(kA)] + (1/A²) j2(kA) r_n r_m sin²α,
/// A = |r_n − r_m|, α the angle between r̂_n and r̂_m, with f_nn = 1/3 (A → 0: j0 → 1,
/// j2/A² finite, sin α → 0), so that ⟨v_n v_m⟩ = (H0 f)²/(2π²) ∫ dk P(k) f_mn(k).
///
/// Exact pair sum (every pair, symmetric pairs once, in parallel; O(N² · k.len())): about
/// 1.7 s for N = 3000 and 121 values of k on two cores (release build). Ascending `k` takes
/// the fastest path. The positions must be non-zero (a radial velocity needs a direction);
/// an object at the origin makes the result NaN.
///
/// # Panics
/// If `positions` and `weights` differ in length.
pub fn bulk_flow_window(
    positions: &[[f64; 3]],
    weights: &[[f64; 3]],
    k: &[f64],
) -> Vec<[[f64; 3]; 3]> {
    let objs = objects("bulk_flow_window", positions, weights);
    let n = objs.len();
    let nk = k.len();
    // A fixed number of blocks (from the input size only), summed in a fixed order, so the
    // result does not depend on the number of threads. Memory: n_blocks · 6 · nk doubles.
    let pairs = n * n.saturating_sub(1) / 2;
    let mem_cap = (1usize << 23) / (6 * nk.max(1));
    let n_blocks = (pairs / 20_000).clamp(1, 64).min(mem_cap.max(1));
    let blocks = pair_blocks(n, n_blocks);
    let ascending = k.windows(2).all(|p| p[0] <= p[1]);
    let partials: Vec<Vec<f64>> = blocks
        .par_iter()
        .map(|&rows| block_pair_sum(&objs, rows, k, ascending))
        .collect();
    let mut total = vec![0.0; 6 * nk];
    for part in &partials {
        for (t, p) in total.iter_mut().zip(part) {
            *t += p;
        }
    }
    let diag = self_window(weights);
    (0..nk)
        .map(|l| {
            let mut m = diag;
            for (c, &(i, j)) in SYM.iter().enumerate() {
                let v = total[c * nk + l];
                m[i][j] += v;
                if i != j {
                    m[j][i] += v;
                }
            }
            m
        })
        .collect()
}

/// Expected covariance (km/s)² of the bulk-flow estimate u_i = Σ_n w_in v_n in linear ΛCDM:
/// R_ij = (H0 f)²/(2π²) ∫_0^∞ dk P(k) W²_ij(k) (Watkins, Feldman & Hudson 2009), with
/// H0 = 100 km/s per h⁻¹ Mpc, `growth_rate` = f at the sample's redshift (e.g.
/// [`growth_rate`](super::growth_rate)) and `power` at z = 0 (rescale σ8 for another epoch). Positions in
/// h⁻¹ Mpc, weights as in [`bulk_flow_window`].
///
/// # k grid
/// The window is evaluated on [`BULK_FLOW_K_POINTS`] = 241 log-spaced points from
/// [`BULK_FLOW_K_MIN`] = 10⁻⁴ to [`BULK_FLOW_K_MAX`] = 2 h Mpc⁻¹ (Δln k ≈ 0.041) and
/// integrated with Simpson's rule in ln k. The spacing is set by the pair terms, which
/// oscillate in k with period 2π/A: at k ~ 0.1–1 h Mpc⁻¹ and A ~ 100–300 h⁻¹ Mpc they are
/// undersampled by any affordable grid and their (small) integral is aliased. Measured
/// against much finer grids, the largest error relative to the largest entry of R was, for
/// 3000 objects in a 150 h⁻¹ Mpc ball with random weights, 1.6 × 10⁻³ with 121 points,
/// 4.9 × 10⁻⁴ with 241 and 5 × 10⁻⁵ with 481; hence 241. Outside the grid:
/// - k < 10⁻⁴: W² has reached its k → 0 limit for any sample smaller than ~10³ h⁻¹ Mpc
///   (corrections O((kR)²/10) ≤ 10⁻³), so W²(k_min) ∫_0^{k_min} P dk is added (this part is
///   ~10⁻⁵ of the total for Planck-like spectra);
/// - k > 2 h Mpc⁻¹: the pair terms of separation A oscillate as j(kA) ≲ 1/(kA) and average
///   out, leaving the self terms f_nn = 1/3, which are added exactly as
///   (1/3) Σ_n w_in w_jn ∫_{k_max}^{10³} P dk (about 0.9 % of ∫ P dk for Planck 2018).
///   What is neglected is the k > 2 part of pairs closer than ~1 h⁻¹ Mpc, at most that
///   0.9 % of their share (1.2 × 10⁻⁴ of R for the test sample with a pair 10⁻³ h⁻¹ Mpc
///   apart).
///
/// Checked against a 2001-point grid from 10⁻⁶ to 100 h Mpc⁻¹ and against per-pair adaptive
/// quadrature without any grid (tests/power_spectrum.rs). Cost: O(N² · 241); about 3 s for
/// N = 3000 on two cores (release build).
///
/// # Panics
/// If `positions` and `weights` differ in length.
pub fn lcdm_bulk_flow_covariance(
    power: &LinearPower,
    growth_rate: f64,
    positions: &[[f64; 3]],
    weights: &[[f64; 3]],
) -> [[f64; 3]; 3] {
    let n = BULK_FLOW_K_POINTS;
    let (u0, u1) = (BULK_FLOW_K_MIN.ln(), BULK_FLOW_K_MAX.ln());
    let h = (u1 - u0) / (n - 1) as f64;
    let ks: Vec<f64> = (0..n).map(|i| (u0 + i as f64 * h).exp()).collect();
    let win = bulk_flow_window(positions, weights, &ks);
    let simpson = simpson_weights(n, h);
    let mut r = [[0.0; 3]; 3];
    for ((w2, &k), &sw) in win.iter().zip(&ks).zip(&simpson) {
        let weight = sw * k * power.pk(k);
        for i in 0..3 {
            for j in 0..3 {
                r[i][j] += weight * w2[i][j];
            }
        }
    }
    let low = power.pk_integral(1e-10, BULK_FLOW_K_MIN);
    let high = power.pk_integral(BULK_FLOW_K_MAX, QUAD_K_MAX);
    let self_part = self_window(weights);
    let h0f = H0_KM_S_PER_MPC_H * growth_rate;
    let c = h0f * h0f / (2.0 * PI * PI);
    for i in 0..3 {
        for j in 0..3 {
            r[i][j] = c * (r[i][j] + win[0][i][j] * low + self_part[i][j] * high);
        }
    }
    r
}

/// Spacing in √A (A in h⁻¹ Mpc) of the separation table of
/// [`lcdm_bulk_flow_covariance_by_separation`].
const SEPARATION_STEP_SQRT: f64 = 0.02;

/// The pair covariance of radial velocities, per (H0 f)²/(2π²), as two functions of the
/// pair separation A: F_mn = ∫ dk P(k) f_mn(k) = cos α Ψ1(A) − (pp/A²) Ψ2(A) with
/// Ψ1(A) = ∫ P(k) j1(kA)/(kA) dk and Ψ2(A) = ∫ P(k) j2(kA) dk (Górski 1988, ApJ 332, L7:
/// the velocity correlation splits into parts along and across the separation; here from
/// the kernel of [`bulk_flow_window`] integrated over k). Tabulated on a uniform grid in
/// s = √A (fine at small A, where high k matters) and interpolated by cubic splines with
/// slope zero at s = 0 (both functions are even in A).
pub(super) struct SeparationTable {
    psi1: UniformSpline,
    psi2: UniformSpline,
}

impl SeparationTable {
    pub(super) fn new(power: &LinearPower, a_max: f64) -> SeparationTable {
        SeparationTable::up_to(power, a_max, QUAD_K_MAX)
    }

    /// The table with the k integrals cut at `k_max` (h Mpc⁻¹; at most 10³), for
    /// separations up to `a_max` (h⁻¹ Mpc).
    pub(super) fn up_to(power: &LinearPower, a_max: f64, k_max: f64) -> SeparationTable {
        let k_max = k_max.min(QUAD_K_MAX);
        let s_max = a_max.max(1.0).sqrt();
        let n = (s_max / SEPARATION_STEP_SQRT).ceil() as usize + 2;
        let h = SEPARATION_STEP_SQRT;
        // k nodes: Gauss–Legendre panels in ln k below 10⁻³ h/Mpc and above 5 h/Mpc, and
        // in k between, where the panels (a quarter period of the fastest oscillation,
        // π/(2 A_max)) follow j(kA) at the largest separation.
        let (mut ks, mut ws) = lnk_nodes(1e-10, 1e-3_f64.min(k_max), 0.05, QUAD_GL_POINTS);
        let (gx, gw) = gauss_legendre(QUAD_GL_POINTS);
        let (k_lo, k_hi) = (1e-3, 5.0_f64.min(k_max));
        let width = (std::f64::consts::FRAC_PI_2 / (n as f64 * h).powi(2)).min(0.01);
        let panels = if k_hi > k_lo {
            ((k_hi - k_lo) / width).ceil() as usize
        } else {
            0
        };
        let width = (k_hi - k_lo) / panels.max(1) as f64;
        for p in 0..panels {
            let mid = k_lo + (p as f64 + 0.5) * width;
            for (x, w) in gx.iter().zip(&gw) {
                ks.push(mid + 0.5 * width * x);
                ws.push(0.5 * width * w);
            }
        }
        if k_max > k_hi {
            let (k3, w3) = lnk_nodes(k_hi, k_max, QUAD_PANEL_LNK, QUAD_GL_POINTS);
            ks.extend(k3);
            ws.extend(w3);
        }
        let wp: Vec<f64> = ks.iter().zip(&ws).map(|(&k, &w)| w * power.pk(k)).collect();
        let values: Vec<(f64, f64)> = (0..n)
            .into_par_iter()
            .map(|i| {
                let a = (i as f64 * h).powi(2);
                let (mut p1, mut p2) = (0.0, 0.0);
                for (&k, &w) in ks.iter().zip(&wp) {
                    let x = k * a;
                    let (j1x, j2) = if x < 1.0 {
                        let y = x * x;
                        (horner(&J1_OVER_X, y), y * horner(&J2_OVER_X2, y))
                    } else {
                        let (sn, cs) = sin_cos_fast(x);
                        let inv3 = 1.0 / (x * x * x);
                        (
                            (sn - x * cs) * inv3,
                            ((3.0 - x * x) * sn - 3.0 * x * cs) * inv3,
                        )
                    };
                    p1 += w * j1x;
                    p2 += w * j2;
                }
                (p1, p2)
            })
            .collect();
        SeparationTable {
            psi1: UniformSpline::even_at_zero(h, values.iter().map(|v| v.0).collect()),
            psi2: UniformSpline::even_at_zero(h, values.iter().map(|v| v.1).collect()),
        }
    }

    /// F = ∫ dk P(k) f_mn(k) = cos α Ψ1(A) − (pp/A²) Ψ2(A) for a pair at separation `sep`
    /// (h⁻¹ Mpc), cos α = `cos_a`, pp/A² = `pp_a2`; (h⁻¹ Mpc)².
    #[inline(always)]
    pub(super) fn pair(&self, sep: f64, cos_a: f64, pp_a2: f64) -> f64 {
        let s = sep.sqrt();
        cos_a * self.psi1.eval(s) - pp_a2 * self.psi2.eval(s)
    }

    /// (Ψ1(A), Ψ2(A)) at separation `sep` (h⁻¹ Mpc), (h⁻¹ Mpc)².
    #[inline(always)]
    pub(super) fn psi(&self, sep: f64) -> (f64, f64) {
        let s = sep.sqrt();
        (self.psi1.eval(s), self.psi2.eval(s))
    }

    /// F of an object with itself: Ψ1(0) = (1/3) ∫ P dk.
    pub(super) fn self_pair(&self) -> f64 {
        self.psi1.eval(0.0)
    }
}

/// A cubic spline through values at x = 0, h, 2h, …, with slope zero at x = 0 and zero
/// curvature at the last node.
struct UniformSpline {
    h: f64,
    y: Vec<f64>,
    m: Vec<f64>,
}

impl UniformSpline {
    fn even_at_zero(h: f64, y: Vec<f64>) -> UniformSpline {
        let n = y.len();
        assert!(n >= 3, "a spline needs three nodes");
        // Tridiagonal system for the second derivatives M (Thomas algorithm):
        // 2M0 + M1 = 6(y1 − y0)/h²; M_{i−1} + 4M_i + M_{i+1} = 6(y_{i+1} − 2y_i + y_{i−1})/h²;
        // M_{n−1} = 0.
        let mut diag = vec![4.0; n];
        let mut rhs = vec![0.0; n];
        diag[0] = 2.0;
        rhs[0] = 6.0 * (y[1] - y[0]) / (h * h);
        for i in 1..n - 1 {
            rhs[i] = 6.0 * (y[i + 1] - 2.0 * y[i] + y[i - 1]) / (h * h);
        }
        diag[n - 1] = 1.0;
        rhs[n - 1] = 0.0;
        let upper = |i: usize| if i < n - 1 { 1.0 } else { 0.0 };
        let lower = |i: usize| if i < n - 1 { 1.0 } else { 0.0 };
        for i in 1..n {
            let factor = lower(i) / diag[i - 1];
            diag[i] -= factor * upper(i - 1);
            rhs[i] -= factor * rhs[i - 1];
        }
        let mut m = vec![0.0; n];
        m[n - 1] = rhs[n - 1] / diag[n - 1];
        for i in (0..n - 1).rev() {
            m[i] = (rhs[i] - upper(i) * m[i + 1]) / diag[i];
        }
        UniformSpline { h, y, m }
    }

    #[inline(always)]
    fn eval(&self, x: f64) -> f64 {
        let t = x / self.h;
        let i = (t as usize).min(self.y.len() - 2);
        let u = t - i as f64;
        let v = 1.0 - u;
        v * self.y[i]
            + u * self.y[i + 1]
            + self.h * self.h / 6.0
                * ((v * v * v - v) * self.m[i] + (u * u * u - u) * self.m[i + 1])
    }
}

/// The same covariance as [`lcdm_bulk_flow_covariance`], R_ij = (H0 f)²/(2π²) Σ_n Σ_m
/// w_in w_jm ∫ dk P(k) f_mn(k), summed over pairs with the k integral done once per
/// separation instead of once per pair: each pair costs two spline look-ups
/// ([`SeparationTable`]), so the cost is O(N²) with a small constant plus a table of
/// about 50 √A_max entries (A_max = twice the largest distance) — seconds for 10⁵ objects
/// where the k-grid pair sum takes the better part of an hour. The self terms are exact:
/// (1/3) Σ_n w_in w_jn ∫ P dk. The k integrals run from 10⁻¹⁰ to 10³ h/Mpc without a tail
/// approximation; against per-pair adaptive quadrature with no grid (the fixture of
/// `covariance_matches_gridless_quadrature`) and against the k-grid method the agreement is
/// checked in tests/power_spectrum.rs. Deterministic whatever the thread count (fixed
/// blocks summed in order).
///
/// # Panics
/// If `positions` and `weights` differ in length.
pub fn lcdm_bulk_flow_covariance_by_separation(
    power: &LinearPower,
    growth_rate: f64,
    positions: &[[f64; 3]],
    weights: &[[f64; 3]],
) -> [[f64; 3]; 3] {
    let objs = objects(
        "lcdm_bulk_flow_covariance_by_separation",
        positions,
        weights,
    );
    let n = objs.len();
    let r_max = positions
        .iter()
        .fold(0.0_f64, |m, r| m.max(dot(r, r).sqrt()));
    let table = SeparationTable::new(power, 2.0 * r_max * (1.0 + 1e-9) + 1e-9);
    let pairs = n * n.saturating_sub(1) / 2;
    let blocks = pair_blocks(n, (pairs / 200_000).clamp(1, 256));
    let partials: Vec<[f64; 6]> = blocks
        .par_iter()
        .map(|&(first, end)| {
            let mut acc = [0.0; 6];
            for a in first..end {
                let oa = &objs[a];
                let mut g = [0.0; 3];
                for ob in &objs[a + 1..] {
                    let d = [oa.r[0] - ob.r[0], oa.r[1] - ob.r[1], oa.r[2] - ob.r[2]];
                    let sep2 = dot(&d, &d);
                    let sep = sep2.sqrt();
                    let cos_a = dot(&oa.u, &ob.u);
                    let pp_a2 = if sep2 > 0.0 {
                        dot(&oa.u, &d) * dot(&ob.u, &d) / sep2
                    } else {
                        0.0
                    };
                    let s = sep.sqrt();
                    let f = cos_a * table.psi1.eval(s) - pp_a2 * table.psi2.eval(s);
                    g[0] += ob.w[0] * f;
                    g[1] += ob.w[1] * f;
                    g[2] += ob.w[2] * f;
                }
                for (c, &(i, j)) in SYM.iter().enumerate() {
                    acc[c] += oa.w[i] * g[j] + oa.w[j] * g[i];
                }
            }
            acc
        })
        .collect();
    let mut total = [0.0; 6];
    for part in &partials {
        for (t, p) in total.iter_mut().zip(part) {
            *t += p;
        }
    }
    let all_k = power.pk_integral(1e-10, QUAD_K_MAX);
    let self_part = self_window(weights);
    let h0f = H0_KM_S_PER_MPC_H * growth_rate;
    let c = h0f * h0f / (2.0 * PI * PI);
    let mut r = [[0.0; 3]; 3];
    for (k, &(i, j)) in SYM.iter().enumerate() {
        let v = c * (total[k] + self_part[i][j] * all_k);
        r[i][j] = v;
        r[j][i] = v;
    }
    r
}
#[cfg(test)]
#[allow(clippy::needless_range_loop)] // 3×3 matrices read best with indices
mod tests {
    use super::*;

    /// f_nn = 1/3; f_mn → cos α / 3 as k → 0; the kernel is continuous across x = 1; and the
    /// two algebraic forms of Górski's kernel agree.
    #[test]
    fn gorski_kernel_limits_and_forms() {
        let rn = [30.0, -10.0, 5.0];
        let rm = [20.0, 15.0, -40.0];
        let nrm = |v: &[f64; 3]| dot(v, v).sqrt();
        let un = [rn[0] / nrm(&rn), rn[1] / nrm(&rn), rn[2] / nrm(&rn)];
        let um = [rm[0] / nrm(&rm), rm[1] / nrm(&rm), rm[2] / nrm(&rm)];
        let d = [rn[0] - rm[0], rn[1] - rm[1], rn[2] - rm[2]];
        let sep = nrm(&d);
        let cos_a = dot(&un, &um);
        let pp = dot(&un, &d) * dot(&um, &d);
        // Self pair.
        assert_eq!(gorski_kernel(0.3, 0.0, 1.0, 0.0, 0.0), 1.0 / 3.0);
        // k → 0.
        let f0 = gorski_kernel(1e-9, sep, cos_a, pp, pp / (sep * sep));
        assert!((f0 - cos_a / 3.0).abs() < 1e-15);
        // Other form, with j0, j2 from their closed forms.
        let sin2 = 1.0 - cos_a * cos_a;
        for k in [0.01, 0.05, 0.2, 1.0, 3.0] {
            let x = k * sep;
            let (s, c) = x.sin_cos();
            let j0v = s / x;
            let j2v = (3.0 / (x * x) - 1.0) * s / x - 3.0 * c / (x * x);
            let other =
                cos_a / 3.0 * (j0v - 2.0 * j2v) + j2v * nrm(&rn) * nrm(&rm) * sin2 / (sep * sep);
            let ours = gorski_kernel(k, sep, cos_a, pp, pp / (sep * sep));
            assert!((ours - other).abs() < 1e-13, "k={k}: {ours} vs {other}");
        }
        // Continuity at x = 1.
        let k1 = 1.0 / sep;
        let below = gorski_kernel(k1 * (1.0 - 1e-12), sep, cos_a, pp, pp / (sep * sep));
        let above = gorski_kernel(k1 * (1.0 + 1e-12), sep, cos_a, pp, pp / (sep * sep));
        assert!((below - above).abs() < 1e-13);
    }

    /// The block partition covers every row once, in order.
    #[test]
    fn pair_blocks_cover_all_rows() {
        for (n, b) in [(0, 4), (1, 4), (2, 64), (10, 3), (1000, 64), (3000, 64)] {
            let blocks = pair_blocks(n, b);
            let mut next = 0;
            for &(s, e) in &blocks {
                assert_eq!(s, next);
                assert!(e > s);
                next = e;
            }
            assert_eq!(next, n);
            assert!(blocks.len() <= b.max(1) + 1);
        }
    }

    /// The window is the same whatever the block split (results independent of threads) and
    /// is symmetric.
    #[test]
    fn window_is_symmetric_and_split_independent() {
        let pos: Vec<[f64; 3]> = (0..50)
            .map(|i| {
                let t = i as f64;
                [
                    50.0 * (0.3 * t).sin() + 1.0,
                    40.0 * (0.7 * t).cos(),
                    10.0 + t,
                ]
            })
            .collect();
        let w: Vec<[f64; 3]> = (0..50)
            .map(|i| {
                let t = i as f64;
                [(1.1 * t).sin(), (0.4 * t).cos(), 0.01 * t]
            })
            .collect();
        let k = [1e-3, 0.05, 0.4];
        let win = bulk_flow_window(&pos, &w, &k);
        for m in &win {
            for i in 0..3 {
                for j in 0..3 {
                    assert_eq!(m[i][j], m[j][i]);
                }
            }
        }
        // Direct double loop over all ordered pairs.
        let objs: Vec<Obj> = pos
            .iter()
            .zip(&w)
            .map(|(r, ww)| {
                let nr = dot(r, r).sqrt();
                Obj {
                    r: *r,
                    u: [r[0] / nr, r[1] / nr, r[2] / nr],
                    w: *ww,
                }
            })
            .collect();
        for (l, &kk) in k.iter().enumerate() {
            let mut m = [[0.0; 3]; 3];
            for a in &objs {
                for b in &objs {
                    let d = [a.r[0] - b.r[0], a.r[1] - b.r[1], a.r[2] - b.r[2]];
                    let sep2 = dot(&d, &d);
                    let pp = dot(&a.u, &d) * dot(&b.u, &d);
                    let pp_a2 = if sep2 > 0.0 { pp / sep2 } else { 0.0 };
                    let f = gorski_kernel(kk, sep2.sqrt(), dot(&a.u, &b.u), pp, pp_a2);
                    for i in 0..3 {
                        for j in 0..3 {
                            m[i][j] += a.w[i] * b.w[j] * f;
                        }
                    }
                }
            }
            for i in 0..3 {
                for j in 0..3 {
                    let scale = m[i][i].abs().max(m[j][j].abs());
                    assert!((win[l][i][j] - m[i][j]).abs() < 1e-12 * scale);
                }
            }
        }
    }
}
