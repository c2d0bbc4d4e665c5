//! Linear matter power spectrum, its σ8 normalisation, the linear growth rate, and the
//! linear-theory covariance of a maximum-likelihood bulk flow.
//!
//! Units: wavenumbers k in h Mpc⁻¹, lengths and positions in h⁻¹ Mpc, P(k) in (h⁻¹ Mpc)³ at
//! z = 0, velocities in km/s. In these units the Hubble constant is H0 = 100 km/s per h⁻¹ Mpc
//! whatever h is ([`H0_KM_S_PER_MPC_H`]).
//!
//! Methods, each implemented once here:
//! - transfer function: Eisenstein & Hu (1998), ApJ 496, 605, astro-ph/9709112 —
//!   [`transfer_eh98`] (with baryon oscillations) and [`transfer_eh98_no_wiggle`];
//! - P(k) = A k^{n_s} T(k)², A fixed by σ(8 h⁻¹ Mpc) = σ8 with the top-hat window —
//!   [`LinearPower`];
//! - growth rate f ≈ Ω_m(z)^0.55: Linder (2005), astro-ph/0507263 (Phys. Rev. D 72, 043529 —
//!   journal reference from memory) —
//!   [`growth_rate`];
//! - radial-velocity correlation of two objects in linear theory: Górski (1988), ApJ 332,
//!   L7 — the kernel f_mn(k) inside [`bulk_flow_window`];
//! - bulk-flow window W²_ij(k) and the expected covariance of a weighted (e.g. maximum
//!   likelihood) bulk-flow estimate: Watkins, Feldman & Hudson (2009), MNRAS 392, 743,
//!   arXiv:0809.4041 — [`bulk_flow_window`], [`lcdm_bulk_flow_covariance`];
//! - rms bulk flow of a top-hat sphere — [`tophat_bulk_flow_rms`].
//!
//! # Numerics
//! Integrals over k are done in ln k. The σ(R) and top-hat integrals use composite 8-point
//! Gauss–Legendre panels of width ≤ 0.02 in ln k over 10⁻⁷ … 10³ h Mpc⁻¹ (what lies outside
//! is below 10⁻⁹ of σ²(R) and of the top-hat velocity integral); P(k) at the nodes is
//! computed once per [`LinearPower`]. Spherical Bessel combinations use their power series
//! for x < 1, where the closed forms lose digits to cancellation. The pair sum of the window
//! is exact (every pair, no binning) and runs over symmetric pairs in parallel; its partial
//! sums are added in a fixed order, so results do not depend on the number of threads.

use std::f64::consts::{E, FRAC_2_PI, PI};

use rayon::prelude::*;
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::cosmology::gauss_legendre;
use super::PhysicsError;

/// H0 in the units of this module: 100 km/s per h⁻¹ Mpc.
pub const H0_KM_S_PER_MPC_H: f64 = 100.0;

/// Smallest wavenumber (h Mpc⁻¹) of the k grid of [`lcdm_bulk_flow_covariance`].
pub const BULK_FLOW_K_MIN: f64 = 1e-4;
/// Largest wavenumber (h Mpc⁻¹) of the k grid of [`lcdm_bulk_flow_covariance`].
pub const BULK_FLOW_K_MAX: f64 = 2.0;
/// Number of log-spaced points of that grid (odd, for Simpson's rule).
pub const BULK_FLOW_K_POINTS: usize = 241;

/// Range and resolution of the σ(R) / top-hat quadrature.
const QUAD_K_MIN: f64 = 1e-7;
const QUAD_K_MAX: f64 = 1e3;
const QUAD_PANEL_LNK: f64 = 0.02;
const QUAD_GL_POINTS: usize = 8;

/// Parameters of the linear matter power spectrum.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PowerParams {
    /// h = H0 / (100 km/s/Mpc).
    pub h: f64,
    /// Total matter density today (CDM + baryons), in units of the critical density.
    pub omega_m: f64,
    /// Baryon density today, in units of the critical density (not Ω_b h²).
    pub omega_b: f64,
    /// CMB temperature today, K.
    pub t_cmb: f64,
    /// Tilt of the primordial spectrum, P_prim ∝ k^{n_s}.
    pub n_s: f64,
    /// rms linear density contrast in a top-hat sphere of 8 h⁻¹ Mpc at z = 0.
    pub sigma8: f64,
}

impl PowerParams {
    /// Planck 2018 base ΛCDM, TT,TE,EE+lowE+lensing+BAO: Planck Collaboration (2020), A&A
    /// 641, A6 ("Planck 2018 results VI. Cosmological parameters"), Table 2.
    ///
    /// - h = 0.6766, Ω_m = 0.3111, n_s = 0.9665, σ8 = 0.8102: identical to the `planck18`
    ///   entry of colossus 1.4.0, which gives its source as that table, column 6 ("with
    ///   BAO"); checked there, the table itself not re-read. The paper's abstract (read)
    ///   quotes the CMB-only H0 = 67.4 ± 0.5, Ω_m = 0.315 ± 0.007, n_s = 0.965 ± 0.004,
    ///   σ8 = 0.811 ± 0.006, consistent with these.
    /// - Ω_b h² = 0.02242 (from memory; consistent with the abstract's 0.0224 ± 0.0001 and
    ///   colossus's rounded Ω_b = 0.0490), so Ω_b = 0.02242 / h².
    /// - T_cmb = 2.7255 K (Fixsen 2009, ApJ 707, 916 — from memory; colossus's default).
    pub fn planck2018() -> Self {
        let h: f64 = 0.6766;
        Self {
            h,
            omega_m: 0.3111,
            omega_b: 0.02242 / (h * h),
            t_cmb: 2.7255,
            n_s: 0.9665,
            sigma8: 0.8102,
        }
    }

    /// Checks that the parameters are finite and in the domain of the fitting formulae:
    /// h, Ω_m, T_cmb, σ8 > 0 and 0 < Ω_b < Ω_m (the full EH98 form needs baryons).
    pub fn validate(&self) -> Result<(), PhysicsError> {
        let named = [
            ("h", self.h),
            ("omega_m", self.omega_m),
            ("omega_b", self.omega_b),
            ("t_cmb", self.t_cmb),
            ("n_s", self.n_s),
            ("sigma8", self.sigma8),
        ];
        for (quantity, value) in named {
            if !value.is_finite() {
                return Err(PhysicsError::NotFinite { quantity, value });
            }
        }
        for (quantity, value) in [
            ("h", self.h),
            ("omega_m", self.omega_m),
            ("omega_b", self.omega_b),
            ("t_cmb", self.t_cmb),
            ("sigma8", self.sigma8),
        ] {
            if value <= 0.0 {
                return Err(PhysicsError::NotPositive { quantity, value });
            }
        }
        if self.omega_b >= self.omega_m {
            return Err(PhysicsError::InvalidCosmology(format!(
                "omega_b = {} must be below omega_m = {}",
                self.omega_b, self.omega_m
            )));
        }
        Ok(())
    }
}

// ---------------------------------------------------------------------------------------------
// Spherical Bessel helpers
// ---------------------------------------------------------------------------------------------

/// Taylor coefficients of j1(x)/x in x²: (−1)^s / (2^s s! (2s+3)!!).
const J1_OVER_X: [f64; 9] = [
    1.0 / 3.0,
    -1.0 / 30.0,
    1.0 / 840.0,
    -1.0 / 45360.0,
    1.0 / 3991680.0,
    -1.0 / 518918400.0,
    1.0 / 93405312000.0,
    -1.0 / 22230464256000.0,
    1.0 / 6758061133824000.0,
];

/// Taylor coefficients of j2(x)/x² in x²: (−1)^s / (2^s s! (2s+5)!!).
const J2_OVER_X2: [f64; 9] = [
    1.0 / 15.0,
    -1.0 / 210.0,
    1.0 / 7560.0,
    -1.0 / 498960.0,
    1.0 / 51891840.0,
    -1.0 / 7783776000.0,
    1.0 / 1587890304000.0,
    -1.0 / 422378820864000.0,
    1.0 / 141919283810304000.0,
];

#[inline(always)]
fn horner(c: &[f64; 9], y: f64) -> f64 {
    let mut acc = c[8];
    for &ci in c[..8].iter().rev() {
        acc = acc * y + ci;
    }
    acc
}

/// j1(x)/x = (sin x − x cos x)/x³; the series (9 terms, error < 10⁻²¹) below x = 1.
#[inline]
fn j1_over_x(x: f64) -> f64 {
    if x.abs() < 1.0 {
        horner(&J1_OVER_X, x * x)
    } else {
        let (s, c) = sin_cos_fast(x);
        (s - x * c) / (x * x * x)
    }
}

/// j2(x)/x² = ((3 − x²) sin x − 3x cos x)/x⁵; the series below x = 1. (The hot loop inlines
/// the same two branches; this scalar form serves the tests.)
#[cfg(test)]
fn j2_over_x2(x: f64) -> f64 {
    if x.abs() < 1.0 {
        horner(&J2_OVER_X2, x * x)
    } else {
        let (s, c) = sin_cos_fast(x);
        let x2 = x * x;
        ((3.0 - x2) * s - 3.0 * x * c) / (x2 * x2 * x)
    }
}

/// j0(x) = sin x / x.
#[inline]
fn j0(x: f64) -> f64 {
    if x.abs() < 1e-4 {
        1.0 - x * x / 6.0
    } else {
        x.sin() / x
    }
}

/// Fourier transform of the real-space top-hat of unit volume: W(x) = 3 (sin x − x cos x)/x³
/// = 3 j1(x)/x, with its series for x < 1.
pub fn tophat_window(x: f64) -> f64 {
    3.0 * j1_over_x(x)
}

/// π/2 split into two 33-bit parts and a remainder (Cody & Waite reduction): n·PIO2_1 and
/// n·PIO2_2 are exact for |n| < 2²⁰. Bit patterns of 1.5707963267341256,
/// 6.077100506303966e-11 and 2.0222662487959506e-21.
const PIO2_1: f64 = f64::from_bits(0x3ff9_21fb_5440_0000);
const PIO2_2: f64 = f64::from_bits(0x3dd0_b461_1a60_0000);
const PIO2_3: f64 = f64::from_bits(0x3ba3_198a_2e03_7073);

/// Largest |x| for the reduction of [`sin_cos_reduced`] (n·PIO2_1 exact for |n| < 2²⁰).
const SIN_COS_REDUCED_MAX: f64 = 1.0e6;

/// sin and cos of x together, without branches (so the compiler can vectorise the window's k
/// loop):
/// Cody–Waite reduction to |r| ≤ π/4 and Taylor polynomials of degree 17 and 18 (truncation
/// < 10⁻¹⁹), the quadrant applied with bit operations. Valid for |x| < 10⁶; agrees with the
/// standard library to ~1 ulp there.
#[inline(always)]
fn sin_cos_reduced(x: f64) -> (f64, f64) {
    // 1.5·2⁵²: adding it rounds x·2/π to an integer n held in the low mantissa bits
    // (two's complement modulo 4 for negative n).
    const SHIFT: f64 = 6_755_399_441_055_744.0;
    let t = x * FRAC_2_PI + SHIFT;
    let bits = t.to_bits();
    let n = t - SHIFT;
    let r = ((x - n * PIO2_1) - n * PIO2_2) - n * PIO2_3;
    let r2 = r * r;
    let ps = -1.0 / 6.0
        + r2 * (1.0 / 120.0
            + r2 * (-1.0 / 5040.0
                + r2 * (1.0 / 362880.0
                    + r2 * (-1.0 / 39916800.0
                        + r2 * (1.0 / 6227020800.0
                            + r2 * (-1.0 / 1307674368000.0 + r2 * (1.0 / 355687428096000.0)))))));
    let pc = 1.0 / 24.0
        + r2 * (-1.0 / 720.0
            + r2 * (1.0 / 40320.0
                + r2 * (-1.0 / 3628800.0
                    + r2 * (1.0 / 479001600.0
                        + r2 * (-1.0 / 87178291200.0
                            + r2 * (1.0 / 20922789888000.0 + r2 * (-1.0 / 6402373705728000.0)))))));
    let s = r + r * r2 * ps;
    let c = 1.0 - 0.5 * r2 + r2 * r2 * pc;
    // Quadrant q = n mod 4: sin x = (s, c, −s, −c)[q], cos x = (c, −s, −c, s)[q].
    let swap = 0u64.wrapping_sub(bits & 1);
    let (sb, cb) = (s.to_bits(), c.to_bits());
    let sin_bits = (sb & !swap) | (cb & swap);
    let cos_bits = (cb & !swap) | (sb & swap);
    let sin_sign = (bits & 2) << 62;
    let cos_sign = (bits.wrapping_add(1) & 2) << 62;
    (
        f64::from_bits(sin_bits ^ sin_sign),
        f64::from_bits(cos_bits ^ cos_sign),
    )
}

/// [`sin_cos_reduced`] with the standard library beyond its range (and for NaN).
#[inline(always)]
fn sin_cos_fast(x: f64) -> (f64, f64) {
    if x.abs() < SIN_COS_REDUCED_MAX {
        sin_cos_reduced(x)
    } else {
        x.sin_cos()
    }
}

// ---------------------------------------------------------------------------------------------
// Eisenstein & Hu (1998)
// ---------------------------------------------------------------------------------------------

/// The k-independent quantities of the EH98 fit (lengths in Mpc, wavenumbers in Mpc⁻¹).
#[derive(Debug, Clone, Copy)]
struct Eh98 {
    h: f64,
    f_b: f64,
    f_c: f64,
    theta2: f64,
    k_eq: f64,
    s: f64,
    k_silk: f64,
    alpha_c: f64,
    beta_c: f64,
    alpha_b: f64,
    beta_b: f64,
    beta_node: f64,
    // no-wiggle form
    omega_m_h: f64,
    alpha_gamma: f64,
    s_nw: f64,
}

impl Eh98 {
    fn new(p: &PowerParams) -> Self {
        let h = p.h;
        let om = p.omega_m * h * h; // Ω0 h²
        let ob = p.omega_b * h * h; // Ωb h²
        let f_b = p.omega_b / p.omega_m;
        let f_c = 1.0 - f_b;
        let theta = p.t_cmb / 2.7; // Θ_2.7
        let theta2 = theta * theta;
        let theta4 = theta2 * theta2;
        // Eq. 2: matter–radiation equality.
        let z_eq = 2.50e4 * om / theta4;
        // Eq. 3: particle horizon scale at equality, Mpc⁻¹.
        let k_eq = 7.46e-2 * om / theta2;
        // Eq. 4: drag epoch.
        let b1 = 0.313 * om.powf(-0.419) * (1.0 + 0.607 * om.powf(0.674));
        let b2 = 0.238 * om.powf(0.223);
        let z_d =
            1291.0 * om.powf(0.251) / (1.0 + 0.659 * om.powf(0.828)) * (1.0 + b1 * ob.powf(b2));
        // Eq. 5: baryon-to-photon momentum density ratio R(z).
        let r_of = |z: f64| 31.5 * ob / theta4 / (z / 1e3);
        let r_d = r_of(z_d);
        let r_eq = r_of(z_eq);
        // Eq. 6: sound horizon at the drag epoch, Mpc.
        let s = 2.0 / (3.0 * k_eq)
            * (6.0 / r_eq).sqrt()
            * (((1.0 + r_d).sqrt() + (r_d + r_eq).sqrt()) / (1.0 + r_eq.sqrt())).ln();
        // Eq. 7: Silk damping scale, Mpc⁻¹.
        let k_silk = 1.6 * ob.powf(0.52) * om.powf(0.73) * (1.0 + (10.4 * om).powf(-0.95));
        // Eq. 11: CDM suppression.
        let a1 = (46.9 * om).powf(0.670) * (1.0 + (32.1 * om).powf(-0.532));
        let a2 = (12.0 * om).powf(0.424) * (1.0 + (45.0 * om).powf(-0.582));
        let alpha_c = a1.powf(-f_b) * a2.powf(-(f_b * f_b * f_b));
        // Eq. 12: CDM log shift.
        let bb1 = 0.944 / (1.0 + (458.0 * om).powf(-0.708));
        let bb2 = (0.395 * om).powf(-0.0266);
        let beta_c = 1.0 / (1.0 + bb1 * (f_c.powf(bb2) - 1.0));
        // Eqs. 14–15: baryon suppression.
        let y = (1.0 + z_eq) / (1.0 + z_d);
        let sq = (1.0 + y).sqrt();
        let g_y = y * (-6.0 * sq + (2.0 + 3.0 * y) * ((sq + 1.0) / (sq - 1.0)).ln());
        let alpha_b = 2.07 * k_eq * s * (1.0 + r_d).powf(-0.75) * g_y;
        // Eq. 24: baryon envelope shift.
        let beta_b = 0.5 + f_b + (3.0 - 2.0 * f_b) * ((17.2 * om).powi(2) + 1.0).sqrt();
        // Eq. 23: node shift.
        let beta_node = 8.41 * om.powf(0.435);
        // Eq. 31: shape suppression of the no-wiggle form.
        let alpha_gamma =
            1.0 - 0.328 * (431.0 * om).ln() * f_b + 0.38 * (22.3 * om).ln() * f_b * f_b;
        // Eq. 26: approximate sound horizon, Mpc.
        let s_nw = 44.5 * (9.83 / om).ln() / (1.0 + 10.0 * ob.powf(0.75)).sqrt();
        Self {
            h,
            f_b,
            f_c,
            theta2,
            k_eq,
            s,
            k_silk,
            alpha_c,
            beta_c,
            alpha_b,
            beta_b,
            beta_node,
            omega_m_h: p.omega_m * h,
            alpha_gamma,
            s_nw,
        }
    }

    /// Eqs. 19–20: T̃0(k, α_c, β_c) given q (eq. 10) and ln(e + 1.8 β_c q).
    #[inline]
    fn t0_tilde(q: f64, log_term: f64, alpha: f64) -> f64 {
        let c = 14.2 / alpha + 386.0 / (1.0 + 69.9 * q.powf(1.08));
        log_term / (log_term + c * q * q)
    }

    /// Full transfer function, eqs. 16–22; `k_h` in h Mpc⁻¹.
    fn transfer(&self, k_h: f64) -> f64 {
        let k = k_h * self.h; // Mpc⁻¹
        let q = k / (13.41 * self.k_eq); // eq. 10
        let ks = k * self.s;
        // CDM, eqs. 17–20.
        let f = 1.0 / (1.0 + (ks / 5.4).powi(4)); // eq. 18
        let log_bc = (E + 1.8 * self.beta_c * q).ln();
        let t_c = f * Self::t0_tilde(q, log_bc, 1.0)
            + (1.0 - f) * Self::t0_tilde(q, log_bc, self.alpha_c);
        // Baryons, eqs. 21–22.
        let log_11 = (E + 1.8 * q).ln();
        let t0_11 = Self::t0_tilde(q, log_11, 1.0);
        let s_tilde = self.s / (1.0 + (self.beta_node / ks).powi(3)).cbrt(); // eq. 22
        let t_b = (t0_11 / (1.0 + (ks / 5.2).powi(2))
            + self.alpha_b / (1.0 + (self.beta_b / ks).powi(3))
                * (-(k / self.k_silk).powf(1.4)).exp())
            * j0(k * s_tilde);
        // Eq. 16.
        self.f_b * t_b + self.f_c * t_c
    }

    /// Zero-baryon-oscillation ("no-wiggle") form, eqs. 28–31 with s from eq. 26.
    fn transfer_no_wiggle(&self, k_h: f64) -> f64 {
        let k = k_h * self.h; // Mpc⁻¹
        let ag = self.alpha_gamma;
        // Eq. 30 (Γ_eff, with k in Mpc⁻¹ and s in Mpc), eq. 28 (q, with k in h Mpc⁻¹), eq. 29.
        let gamma_eff = self.omega_m_h * (ag + (1.0 - ag) / (1.0 + (0.43 * k * self.s_nw).powi(4)));
        let q = k_h * self.theta2 / gamma_eff;
        let l0 = (2.0 * E + 1.8 * q).ln();
        let c0 = 14.2 + 731.0 / (1.0 + 62.5 * q);
        l0 / (l0 + c0 * q * q)
    }
}

/// Eisenstein & Hu (1998) transfer function with baryon acoustic oscillations: their eqs.
/// 2–7 (equality, drag epoch, R, sound horizon s, Silk scale), 10–12 (q, α_c, β_c), 14–15
/// (α_b, G), 16 (T = Ω_b/Ω_m T_b + Ω_c/Ω_m T_c), 17–20 (CDM part), 21–22 (baryon part with
/// the node-shifted s̃) and 23–24 (β_node, β_b). `k` in h Mpc⁻¹ (converted to Mpc⁻¹ inside);
/// Θ_2.7 = T_cmb/2.7 K. T(0) = 1. Needs 0 < Ω_b < Ω_m ([`PowerParams::validate`]); other
/// inputs give NaN.
pub fn transfer_eh98(k: f64, p: &PowerParams) -> f64 {
    Eh98::new(p).transfer(k)
}

/// Eisenstein & Hu (1998) transfer function without acoustic oscillations ("zero baryon" /
/// "no wiggle" form): eq. 26 (approximate sound horizon), eq. 28 (q with Γ_eff), eq. 29
/// (T0 = L0/(L0 + C0 q²)), eqs. 30–31 (Γ_eff and α_Γ). `k` in h Mpc⁻¹.
pub fn transfer_eh98_no_wiggle(k: f64, p: &PowerParams) -> f64 {
    Eh98::new(p).transfer_no_wiggle(k)
}

// ---------------------------------------------------------------------------------------------
// Quadrature in ln k
// ---------------------------------------------------------------------------------------------

/// Composite Gauss–Legendre nodes on [ln k_lo, ln k_hi], panels no wider than `panel`, and
/// weights for ∫ g(k) dk ≈ Σ w_i g(k_i) (the Jacobian k is folded into w).
fn lnk_nodes(k_lo: f64, k_hi: f64, panel: f64, points: usize) -> (Vec<f64>, Vec<f64>) {
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
fn simpson_weights(n: usize, h: f64) -> Vec<f64> {
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

// ---------------------------------------------------------------------------------------------
// Linear power spectrum
// ---------------------------------------------------------------------------------------------

/// The linear matter power spectrum at z = 0, P(k) = A k^{n_s} T(k)² with the full EH98
/// transfer function, normalised so that the top-hat σ(8 h⁻¹ Mpc) equals σ8.
///
/// The normalisation integral σ²(R) = (1/2π²) ∫ dk k² P(k) W²(kR) is done in ln k from 10⁻⁷
/// to 10³ h Mpc⁻¹ with 8-point Gauss–Legendre panels of width 0.02 (about 9200 nodes);
/// checked against an independent adaptive quadrature to better than 10⁻⁶ relative.
#[derive(Debug, Clone)]
pub struct LinearPower {
    params: PowerParams,
    eh: Eh98,
    amplitude: f64,
    /// Quadrature nodes (h Mpc⁻¹), dk-weights and unnormalised P̃ = k^{n_s} T² at the nodes.
    nodes_k: Vec<f64>,
    nodes_w: Vec<f64>,
    nodes_p: Vec<f64>,
}

impl LinearPower {
    /// Builds the spectrum and its σ8 normalisation. Parameters outside the fit's domain
    /// ([`PowerParams::validate`]) give NaN values; validate user input first.
    pub fn new(p: PowerParams) -> Self {
        let eh = Eh98::new(&p);
        let (nodes_k, nodes_w) = lnk_nodes(QUAD_K_MIN, QUAD_K_MAX, QUAD_PANEL_LNK, QUAD_GL_POINTS);
        let nodes_p: Vec<f64> = nodes_k
            .iter()
            .map(|&k| {
                let t = eh.transfer(k);
                k.powf(p.n_s) * t * t
            })
            .collect();
        let mut lp = Self {
            params: p,
            eh,
            amplitude: 1.0,
            nodes_k,
            nodes_w,
            nodes_p,
        };
        let s8 = lp.sigma_r(8.0);
        lp.amplitude = p.sigma8 * p.sigma8 / (s8 * s8);
        lp
    }

    /// The parameters.
    pub fn params(&self) -> &PowerParams {
        &self.params
    }

    /// A in P(k) = A k^{n_s} T(k)², (h⁻¹ Mpc)^{3+n_s}.
    pub fn amplitude(&self) -> f64 {
        self.amplitude
    }

    /// The EH98 transfer function (with oscillations) of these parameters; k in h Mpc⁻¹.
    pub fn transfer(&self, k: f64) -> f64 {
        self.eh.transfer(k)
    }

    /// P(k) at z = 0 in (h⁻¹ Mpc)³, k in h Mpc⁻¹.
    pub fn pk(&self, k: f64) -> f64 {
        let t = self.eh.transfer(k);
        self.amplitude * k.powf(self.params.n_s) * t * t
    }

    /// rms linear density contrast at z = 0 in a top-hat sphere of radius `r` (h⁻¹ Mpc):
    /// σ²(R) = (1/2π²) ∫ dk k² P(k) W²(kR), W(x) = 3(sin x − x cos x)/x³.
    pub fn sigma_r(&self, r: f64) -> f64 {
        let mut acc = 0.0;
        for ((&k, &w), &p) in self.nodes_k.iter().zip(&self.nodes_w).zip(&self.nodes_p) {
            let win = tophat_window(k * r);
            acc += w * k * k * p * win * win;
        }
        (self.amplitude * acc / (2.0 * PI * PI)).sqrt()
    }

    /// ∫ P(k) dk from `k_lo` to `k_hi` (h Mpc⁻¹; result in (h⁻¹ Mpc)²), by 8-point
    /// Gauss–Legendre panels of width ≤ 0.02 in ln k. (H0 f)²/(2π²) times this over all k
    /// is the 3-D velocity dispersion of linear theory.
    pub fn pk_integral(&self, k_lo: f64, k_hi: f64) -> f64 {
        let valid = k_lo > 0.0 && k_hi > k_lo;
        if !valid {
            return 0.0;
        }
        let (ks, ws) = lnk_nodes(k_lo, k_hi, QUAD_PANEL_LNK, QUAD_GL_POINTS);
        ks.iter().zip(&ws).map(|(&k, &w)| w * self.pk(k)).sum()
    }

    /// ∫ dk P(k) W²(kR) over the σ(R) quadrature range, (h⁻¹ Mpc)².
    fn pk_tophat2_integral(&self, radius: f64) -> f64 {
        let mut acc = 0.0;
        for ((&k, &w), &p) in self.nodes_k.iter().zip(&self.nodes_w).zip(&self.nodes_p) {
            let win = tophat_window(k * radius);
            acc += w * p * win * win;
        }
        self.amplitude * acc
    }
}

/// Linear growth rate f = dln D/dln a ≈ Ω_m(z)^0.55 (Linder 2005, astro-ph/0507263, γ = 0.55
/// for ΛCDM), with Ω_m(z) = Ω_m (1+z)³ / E(z)² and E² = Ω_m (1+z)³ + Ω_k (1+z)² + Ω_de,
/// Ω_k = 1 − Ω_m − Ω_de (a cosmological constant; no radiation). Against the exact growth
/// ODE the approximation is good to about 1% for flat ΛCDM at z ≥ 0.
pub fn growth_rate(omega_m0: f64, omega_de0: f64, z: f64) -> f64 {
    let a3 = (1.0 + z).powi(3);
    let omega_k = 1.0 - omega_m0 - omega_de0;
    let e2 = omega_m0 * a3 + omega_k * (1.0 + z) * (1.0 + z) + omega_de0;
    (omega_m0 * a3 / e2).powf(0.55)
}

/// rms of ONE Cartesian component of the bulk flow (mean velocity) of a top-hat sphere of
/// radius `radius` (h⁻¹ Mpc) in linear theory, km/s:
/// σ_1D² = (H0 f)² / (6π²) ∫ dk P(k) W²(kR), H0 = 100 km/s per h⁻¹ Mpc, `f` the growth
/// rate. (The velocity field v(k) = i H0 f δ(k) k/k² gives ⟨|v̄|²⟩ = (H0 f)²/(2π²) ∫ P W² dk
/// for the 3-D bulk flow; each component carries a third.) The rms speed is √3 times this.
pub fn tophat_bulk_flow_rms(power: &LinearPower, f: f64, radius: f64) -> f64 {
    let h0f = H0_KM_S_PER_MPC_H * f;
    (h0f * h0f / (6.0 * PI * PI) * power.pk_tophat2_integral(radius)).sqrt()
}

// ---------------------------------------------------------------------------------------------
// Bulk-flow window and covariance
// ---------------------------------------------------------------------------------------------

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
/// [`growth_rate`]) and `power` at z = 0 (rescale σ8 for another epoch). Positions in
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
struct SeparationTable {
    psi1: UniformSpline,
    psi2: UniformSpline,
}

impl SeparationTable {
    fn new(power: &LinearPower, a_max: f64) -> SeparationTable {
        let s_max = a_max.max(1.0).sqrt();
        let n = (s_max / SEPARATION_STEP_SQRT).ceil() as usize + 2;
        let h = SEPARATION_STEP_SQRT;
        // k nodes: Gauss–Legendre panels in ln k below 10⁻³ h/Mpc and above 5 h/Mpc, and
        // in k between, where the panels (a quarter period of the fastest oscillation,
        // π/(2 A_max)) follow j(kA) at the largest separation.
        let (mut ks, mut ws) = lnk_nodes(1e-10, 1e-3, 0.05, QUAD_GL_POINTS);
        let (gx, gw) = gauss_legendre(QUAD_GL_POINTS);
        let (k_lo, k_hi) = (1e-3, 5.0);
        let width = (std::f64::consts::FRAC_PI_2 / (n as f64 * h).powi(2)).min(0.01);
        let panels = ((k_hi - k_lo) / width).ceil() as usize;
        let width = (k_hi - k_lo) / panels as f64;
        for p in 0..panels {
            let mid = k_lo + (p as f64 + 0.5) * width;
            for (x, w) in gx.iter().zip(&gw) {
                ks.push(mid + 0.5 * width * x);
                ws.push(0.5 * width * w);
            }
        }
        let (k3, w3) = lnk_nodes(k_hi, QUAD_K_MAX, QUAD_PANEL_LNK, QUAD_GL_POINTS);
        ks.extend(k3);
        ws.extend(w3);
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

    /// Our fast sin/cos against the standard library (itself correctly rounded to < 1 ulp).
    #[test]
    fn sin_cos_fast_matches_std() {
        let mut worst: f64 = 0.0;
        let mut x = 1e-3;
        while x < 2e5 {
            for v in [x, -x, x * 1.000_000_123] {
                let (s, c) = sin_cos_fast(v);
                let (s0, c0) = v.sin_cos();
                worst = worst.max((s - s0).abs()).max((c - c0).abs());
            }
            x *= 1.0007;
        }
        assert!(worst < 4e-16, "worst {worst}");
        // The fall-back region and special values.
        assert_eq!(sin_cos_fast(3e6), 3e6_f64.sin_cos());
        assert!(sin_cos_fast(f64::NAN).0.is_nan());
    }

    /// The series and closed forms of j1/x and j2/x² meet at x = 1 (and agree nearby).
    #[test]
    fn bessel_series_match_closed_forms() {
        for x in [0.6_f64, 0.8, 0.999_999, 1.0, 1.3] {
            let (s, c) = x.sin_cos();
            let a = (s - x * c) / (x * x * x);
            let b = ((3.0 - x * x) * s - 3.0 * x * c) / x.powi(5);
            assert!((horner(&J1_OVER_X, x * x) / a - 1.0).abs() < 1e-14, "{x}");
            assert!((horner(&J2_OVER_X2, x * x) / b - 1.0).abs() < 1e-12, "{x}");
            assert!((j1_over_x(x) / a - 1.0).abs() < 1e-14);
            assert!((j2_over_x2(x) / b - 1.0).abs() < 1e-12);
        }
        // Limits: W(0) = 1, j2/x² → 1/15.
        assert_eq!(tophat_window(0.0), 1.0);
        assert_eq!(j2_over_x2(0.0), 1.0 / 15.0);
    }

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

    #[test]
    fn planck2018_is_valid_and_rejects_bad_input() {
        assert!(PowerParams::planck2018().validate().is_ok());
        let mut p = PowerParams::planck2018();
        p.omega_b = 0.5;
        assert!(p.validate().is_err());
        p = PowerParams::planck2018();
        p.h = f64::NAN;
        assert!(p.validate().is_err());
        p = PowerParams::planck2018();
        p.sigma8 = 0.0;
        assert!(p.validate().is_err());
    }

    /// T(k → 0) → 1 for both forms; σ(8) reproduces σ8 by construction.
    #[test]
    fn large_scale_limits() {
        let p = PowerParams::planck2018();
        assert!((transfer_eh98(1e-7, &p) - 1.0).abs() < 1e-6);
        assert!((transfer_eh98_no_wiggle(1e-7, &p) - 1.0).abs() < 1e-6);
        assert!((transfer_eh98(0.0, &p) - 1.0).abs() < 1e-15);
        let lp = LinearPower::new(p);
        assert!((lp.sigma_r(8.0) / p.sigma8 - 1.0).abs() < 1e-14);
    }
}
