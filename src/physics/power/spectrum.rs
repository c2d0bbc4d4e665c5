//! The linear matter power spectrum: its parameters, the Eisenstein & Hu (1998) transfer
//! function, the σ8 normalisation and σ(R), the linear growth rate, and the rms bulk flow of
//! a top-hat sphere.

use std::f64::consts::{E, PI};

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::bessel::{j0, tophat_window};
use super::quadrature::{lnk_nodes, QUAD_GL_POINTS, QUAD_K_MAX, QUAD_K_MIN, QUAD_PANEL_LNK};
use super::H0_KM_S_PER_MPC_H;
use crate::physics::PhysicsError;

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

/// Linear growth rate f = dln D/dln a ≈ Ω_m(z)^γ (Linder 2005, astro-ph/0507263), with
/// Ω_m(z) = Ω_m (1+z)³ / E(z)² from the full E(z) of `params` (radiation, curvature, CPL
/// dark energy), and γ = 0.55 + 0.05 [1 + w(z = 1)] for w(z = 1) ≥ −1, 0.55 + 0.02 [1 + w(z = 1)]
/// below (Linder 2005; from memory), w(z = 1) = w0 + wa/2 for CPL. γ = 0.55 for a cosmological
/// constant; against the exact growth ODE the approximation is good to about 1% for flat ΛCDM
/// at z ≥ 0.
pub fn growth_rate_of(params: &crate::physics::cosmology::CosmologyParams, z: f64) -> f64 {
    let w1 = params.w0 + 0.5 * params.wa;
    let gamma = if w1 >= -1.0 {
        0.55 + 0.05 * (1.0 + w1)
    } else {
        0.55 + 0.02 * (1.0 + w1)
    };
    (params.omega_m * (1.0 + z).powi(3) / params.e2(z)).powf(gamma)
}

/// [`growth_rate_of`] for a ΛCDM model given by its matter and cosmological-constant
/// densities today (no radiation; Ω_k = 1 − Ω_m − Ω_de).
pub fn growth_rate(omega_m0: f64, omega_de0: f64, z: f64) -> f64 {
    growth_rate_of(
        &crate::physics::cosmology::CosmologyParams {
            h0: 70.0,
            omega_m: omega_m0,
            omega_de: omega_de0,
            omega_r: 0.0,
            w0: -1.0,
            wa: 0.0,
        },
        z,
    )
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
#[cfg(test)]
mod growth_tests {
    use super::*;
    use crate::physics::cosmology::CosmologyParams;

    /// γ(w) of Linder (2005) (from memory): 0.55 for w = −1, 0.55 + 0.05(1 + w) above,
    /// 0.55 + 0.02(1 + w) below, with w at z = 1 (w0 + wa/2 for CPL); arithmetic on the formula.
    #[test]
    fn growth_index_follows_the_equation_of_state() {
        let base = CosmologyParams::flat_lcdm(70.0, 0.3);
        let om_z = |p: &CosmologyParams, z: f64| p.omega_m * (1.0 + z).powi(3) / p.e2(z);
        assert!((growth_rate_of(&base, 0.5) - om_z(&base, 0.5).powf(0.55)).abs() < 1e-15);
        assert!((growth_rate_of(&base, 0.0) - growth_rate(0.3, 0.7, 0.0)).abs() < 1e-15);
        let quint = CosmologyParams { w0: -0.9, ..base };
        assert!((growth_rate_of(&quint, 0.2) - om_z(&quint, 0.2).powf(0.555)).abs() < 1e-15);
        let phantom = CosmologyParams {
            w0: -1.1,
            wa: -0.2,
            ..base
        };
        // w(z = 1) = −1.2: γ = 0.55 − 0.004.
        assert!((growth_rate_of(&phantom, 0.0) - om_z(&phantom, 0.0).powf(0.546)).abs() < 1e-15);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

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
