//! FLRW background: expansion rate and distances, with a fast, exact-to-rounding inverse.
//!
//! Formulas: Hogg (1999), "Distance measures in cosmology", astro-ph/9905116, eqs. 14–16,
//! 18, 21, 25; the CPL dark-energy density of Chevallier & Polarski (2001), IJMPD 10, 213 and
//! Linder (2003), PRL 90, 091301, w(a) = w0 + wa (1 − a), whose density scales as
//! f_de(z) = (1+z)^{3(1+w0+wa)} exp(−3 wa z/(1+z)).
//!
//! # Numerics
//! The comoving distance is tabulated once per cosmology in u = ln(1+z), on a uniform grid,
//! by Gauss–Legendre quadrature on each cell (10 points; the integrand is smooth, so each
//! cell is exact to rounding). Between nodes D_C(u) is the quintic Hermite interpolant of the
//! value and its first two derivatives, which are known in closed form (dD_C/du =
//! D_H (1+z)/E), so the interpolation error is O(h⁶) — below 10⁻¹³ relative on the default
//! grid. Inverses (z from D_C, D_M, D_L, …) solve on that interpolant by safeguarded Newton
//! iteration, so a million inversions cost a few hundred nanoseconds each.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::constants::C_KM_S;
use super::PhysicsError;

/// Parameters of an FLRW model. Ω_k follows from closure: Ω_k = 1 − Ω_m − Ω_de − Ω_r.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CosmologyParams {
    /// Hubble constant, km/s/Mpc.
    pub h0: f64,
    /// Matter density today (baryons + cold dark matter), in units of the critical density.
    pub omega_m: f64,
    /// Dark-energy density today.
    pub omega_de: f64,
    /// Radiation density today (photons + massless neutrinos); 0 unless asked for.
    pub omega_r: f64,
    /// Dark-energy equation of state today (CPL w0).
    pub w0: f64,
    /// Its evolution (CPL wa): w(a) = w0 + wa (1 − a).
    pub wa: f64,
}

/// A named parameter set with its source.
#[derive(Debug, Clone, Copy)]
pub struct Preset {
    pub name: &'static str,
    pub params: CosmologyParams,
    pub source: &'static str,
}

impl CosmologyParams {
    /// Flat ΛCDM without radiation: Ω_de = 1 − Ω_m, w0 = −1, wa = 0.
    pub fn flat_lcdm(h0: f64, omega_m: f64) -> Self {
        Self {
            h0,
            omega_m,
            omega_de: 1.0 - omega_m,
            omega_r: 0.0,
            w0: -1.0,
            wa: 0.0,
        }
    }

    /// The default: flat ΛCDM with H0 = 70 km/s/Mpc and Ω_m = 0.3 — a common-practice
    /// round-number choice, not a measurement.
    pub fn default_common_practice() -> Self {
        Self::flat_lcdm(70.0, 0.3)
    }

    /// Curvature density from closure.
    pub fn omega_k(&self) -> f64 {
        1.0 - self.omega_m - self.omega_de - self.omega_r
    }

    /// h = H0 / (100 km/s/Mpc).
    pub fn little_h(&self) -> f64 {
        self.h0 / 100.0
    }

    /// Hubble distance c/H0, Mpc.
    pub fn hubble_distance(&self) -> f64 {
        C_KM_S / self.h0
    }

    /// E(z)² = H(z)²/H0² (Hogg 1999, eq. 14, with CPL dark energy).
    #[inline]
    pub fn e2(&self, z: f64) -> f64 {
        let a = 1.0 + z;
        let a2 = a * a;
        self.omega_r * a2 * a2
            + self.omega_m * a2 * a
            + self.omega_k() * a2
            + self.omega_de * self.de_density(z)
    }

    /// dE²/dz.
    #[inline]
    fn e2_derivative(&self, z: f64) -> f64 {
        let a = 1.0 + z;
        4.0 * self.omega_r * a * a * a
            + 3.0 * self.omega_m * a * a
            + 2.0 * self.omega_k() * a
            + self.omega_de * self.de_density(z) * self.de_log_derivative(z)
    }

    /// Dark-energy density relative to today, f_de(z).
    #[inline]
    fn de_density(&self, z: f64) -> f64 {
        if self.w0 == -1.0 && self.wa == 0.0 {
            return 1.0;
        }
        let a = 1.0 + z;
        (3.0 * (1.0 + self.w0 + self.wa) * a.ln() - 3.0 * self.wa * z / a).exp()
    }

    /// d ln f_de / dz.
    #[inline]
    fn de_log_derivative(&self, z: f64) -> f64 {
        let a = 1.0 + z;
        3.0 * (1.0 + self.w0 + self.wa) / a - 3.0 * self.wa / (a * a)
    }

    /// Deceleration q0 and jerk j0 today, from the Taylor expansion of E(z):
    /// q0 = E′(0) − 1, j0 = q0(2q0 + 1) + q′(0) with q(z) = (1+z)E′/E − 1 (Visser 2004,
    /// CQG 21, 2603, sign convention with j0 = +1 in flat ΛCDM).
    pub fn deceleration_jerk(&self) -> (f64, f64) {
        // F = E², F(0) = 1 (up to rounding in the parameters).
        let f0 = self.e2(0.0);
        let e0 = f0.sqrt();
        let f1 = self.e2_derivative(0.0);
        // Second derivative of F at 0.
        let fde = self.de_density(0.0);
        let l1 = self.de_log_derivative(0.0);
        let l2 = -3.0 * (1.0 + self.w0 + self.wa) + 6.0 * self.wa;
        let f2 = 12.0 * self.omega_r
            + 6.0 * self.omega_m
            + 2.0 * self.omega_k()
            + self.omega_de * fde * (l2 + l1 * l1);
        let e1 = f1 / (2.0 * e0);
        let e2 = (f2 - 2.0 * e1 * e1) / (2.0 * e0);
        let q0 = e1 / e0 - 1.0;
        let dq = e1 / e0 + (e2 / e0 - e1 * e1 / (e0 * e0));
        let j0 = q0 * (2.0 * q0 + 1.0) + dq;
        (q0, j0)
    }

    /// Check the parameters alone (not yet the expansion history).
    pub fn validate(&self) -> Result<(), PhysicsError> {
        let named = [
            ("H0", self.h0),
            ("omega_m", self.omega_m),
            ("omega_de", self.omega_de),
            ("omega_r", self.omega_r),
            ("w0", self.w0),
            ("wa", self.wa),
        ];
        for (name, v) in named {
            if !v.is_finite() {
                return Err(PhysicsError::InvalidCosmology(format!(
                    "{name} is not a finite number ({v})"
                )));
            }
        }
        if self.h0 <= 0.0 {
            return Err(PhysicsError::InvalidCosmology(format!(
                "H0 must be positive, got {} km/s/Mpc",
                self.h0
            )));
        }
        if self.omega_m < 0.0 {
            return Err(PhysicsError::InvalidCosmology(format!(
                "omega_m must not be negative, got {}",
                self.omega_m
            )));
        }
        if self.omega_r < 0.0 {
            return Err(PhysicsError::InvalidCosmology(format!(
                "omega_r must not be negative, got {}",
                self.omega_r
            )));
        }
        Ok(())
    }
}

/// Named parameter sets.
pub const PRESETS: &[Preset] = &[
    Preset {
        name: "concordance",
        params: CosmologyParams {
            h0: 70.0,
            omega_m: 0.3,
            omega_de: 0.7,
            omega_r: 0.0,
            w0: -1.0,
            wa: 0.0,
        },
        source: "the concordance model of common practice: flat ΛCDM, H0 = 70 km/s/Mpc, Ω_m = 0.3 (round numbers, not a measurement)",
    },
    Preset {
        name: "planck2018",
        params: CosmologyParams {
            h0: 67.66,
            omega_m: 0.3111,
            omega_de: 0.6889,
            omega_r: 0.0,
            w0: -1.0,
            wa: 0.0,
        },
        // The table values are from memory (not re-read in the paper).
        source: "Planck Collaboration VI (2020), A&A 641, A6, Table 2, TT,TE,EE+lowE+lensing+BAO: H0 = 67.66, Ω_m = 0.3111, flat (radiation neglected)",
    },
];

/// Former preset names, still read from the records of older outputs and run files.
const FORMER_PRESET_NAMES: &[(&str, &str)] = &[("common", "concordance")];

/// Look up a preset by name (a former name finds its successor).
pub fn find_preset(name: &str) -> Result<&'static Preset, String> {
    let name = FORMER_PRESET_NAMES
        .iter()
        .find(|(old, _)| old.eq_ignore_ascii_case(name))
        .map_or(name, |(_, new)| *new);
    PRESETS
        .iter()
        .find(|p| p.name.eq_ignore_ascii_case(name))
        .ok_or_else(|| {
            let names: Vec<_> = PRESETS.iter().map(|p| p.name).collect();
            format!(
                "unknown cosmology preset '{name}'; known: {}",
                names.join(", ")
            )
        })
}

/// Unit of distances in and out.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema, Default)]
#[serde(rename_all = "kebab-case")]
pub enum LengthUnit {
    /// Megaparsecs.
    #[default]
    Mpc,
    /// h⁻¹ Mpc, with h = H0/100: D[h⁻¹ Mpc] = h · D[Mpc].
    MpcOverH,
}

impl LengthUnit {
    /// Factor that takes a length in Mpc to this unit.
    pub fn from_mpc_factor(self, params: &CosmologyParams) -> f64 {
        match self {
            LengthUnit::Mpc => 1.0,
            LengthUnit::MpcOverH => params.little_h(),
        }
    }

    /// Label for column units.
    pub fn label(self) -> &'static str {
        match self {
            LengthUnit::Mpc => "Mpc",
            LengthUnit::MpcOverH => "Mpc/h",
        }
    }
}

/// Gauss–Legendre nodes and weights on [−1, 1], by Newton iteration on P_n
/// (Abramowitz & Stegun 1964, §25.4.29; nodes from the Tricomi initial guess).
pub fn gauss_legendre(n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut x = vec![0.0; n];
    let mut w = vec![0.0; n];
    for i in 0..n {
        let mut r = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 0.0;
        for _ in 0..100 {
            let (mut p0, mut p1) = (1.0, r);
            for k in 2..=n {
                let p2 = ((2 * k - 1) as f64 * r * p1 - (k - 1) as f64 * p0) / k as f64;
                p0 = p1;
                p1 = p2;
            }
            dp = n as f64 * (r * p1 - p0) / (r * r - 1.0);
            let dr = p1 / dp;
            r -= dr;
            if dr.abs() < 1e-16 {
                break;
            }
        }
        x[i] = r;
        w[i] = 2.0 / ((1.0 - r * r) * dp * dp);
    }
    (x, w)
}

const TABLE_STEP_U: f64 = 0.004;
/// Largest redshift tabulated by default.
pub const DEFAULT_Z_MAX: f64 = 20.0;
const GL_POINTS: usize = 10;

/// A cosmology ready for fast distance evaluation and inversion.
#[derive(Debug, Clone)]
pub struct Cosmology {
    params: CosmologyParams,
    omega_k: f64,
    d_h: f64,
    /// D_C at nodes u_i = i·h.
    dc: Vec<f64>,
    /// dD_C/du at nodes.
    dc1: Vec<f64>,
    /// d²D_C/du² at nodes.
    dc2: Vec<f64>,
    h: f64,
    /// Largest u covered.
    u_max: f64,
    /// First redshift where E² ≤ 0, if any below the requested maximum.
    no_expansion: Option<(f64, f64)>,
    /// Largest u up to which (1+z) D_M grows (the luminosity-distance inverse is unique).
    u_lum_limit: f64,
    /// (1+z) D_M at the nodes.
    lum_nodes: Vec<f64>,
    /// D_M/(1+z) at the nodes.
    ang_nodes: Vec<f64>,
    /// Largest u up to which D_M/(1+z) grows (below the angular-diameter maximum).
    u_ang_limit: f64,
}

impl Cosmology {
    /// Build the distance table up to z = 20 (or to where E² first reaches 0).
    pub fn new(params: CosmologyParams) -> Result<Self, PhysicsError> {
        Self::with_z_max(params, DEFAULT_Z_MAX)
    }

    /// Build the distance table up to `z_max`.
    pub fn with_z_max(params: CosmologyParams, z_max: f64) -> Result<Self, PhysicsError> {
        params.validate()?;
        if !(z_max.is_finite() && z_max > 0.0) {
            return Err(PhysicsError::NotPositive {
                quantity: "largest tabulated redshift",
                value: z_max,
            });
        }
        let d_h = params.hubble_distance();
        let u_end = z_max.ln_1p();
        let n_cells = (u_end / TABLE_STEP_U).ceil().max(1.0) as usize;
        let h = u_end / n_cells as f64;
        let (gx, gw) = gauss_legendre(GL_POINTS);
        let integrand = |u: f64| -> Option<f64> {
            let z = u.exp_m1();
            let e2 = params.e2(z);
            (e2 > 0.0).then(|| d_h * u.exp() / e2.sqrt())
        };
        let mut dc = Vec::with_capacity(n_cells + 1);
        let mut dc1 = Vec::with_capacity(n_cells + 1);
        let mut dc2 = Vec::with_capacity(n_cells + 1);
        let mut no_expansion = None;
        let e0 = params.e2(0.0);
        if e0 <= 0.0 {
            return Err(PhysicsError::NoExpansion { z: 0.0, e2: e0 });
        }
        let mut acc = 0.0;
        'cells: for i in 0..=n_cells {
            let u = i as f64 * h;
            if i > 0 {
                let a = u - h;
                let mut sum = 0.0;
                for (x, w) in gx.iter().zip(&gw) {
                    let ui = a + 0.5 * h * (x + 1.0);
                    match integrand(ui) {
                        Some(f) => sum += w * f,
                        None => {
                            let z = ui.exp_m1();
                            no_expansion = Some((z, params.e2(z)));
                            break 'cells;
                        }
                    }
                }
                acc += 0.5 * h * sum;
            }
            let z = u.exp_m1();
            let e2 = params.e2(z);
            if e2 <= 0.0 {
                no_expansion = Some((z, e2));
                break;
            }
            let e = e2.sqrt();
            let a = u.exp();
            // dD_C/du = D_H a / E;  d²D_C/du² = D_H a/E − D_H a (dE/du)/E², dE/du = a F′/(2E).
            let de_du = a * params.e2_derivative(z) / (2.0 * e);
            dc.push(acc);
            dc1.push(d_h * a / e);
            dc2.push(d_h * a / e - d_h * a * de_du / (e * e));
        }
        if dc.len() < 2 {
            let (z, e2) = no_expansion.unwrap_or((0.0, e0));
            return Err(PhysicsError::NoExpansion { z, e2 });
        }
        let u_max = (dc.len() - 1) as f64 * h;
        let mut c = Self {
            omega_k: params.omega_k(),
            params,
            d_h,
            dc,
            dc1,
            dc2,
            h,
            u_max,
            no_expansion,
            u_lum_limit: u_max,
            u_ang_limit: u_max,
            lum_nodes: vec![],
            ang_nodes: vec![],
        };
        c.lum_nodes = (0..c.dc.len())
            .map(|i| c.luminosity_at_u(i as f64 * h).0)
            .collect();
        c.ang_nodes = (0..c.dc.len())
            .map(|i| c.angular_at_u(i as f64 * h).0)
            .collect();
        c.u_lum_limit = c.increasing_limit(&|u| c.luminosity_at_u(u));
        c.u_ang_limit = c.increasing_limit(&|u| c.angular_at_u(u));
        Ok(c)
    }

    /// (1+z) D_M and its u-derivative.
    #[inline]
    fn luminosity_at_u(&self, u: f64) -> (f64, f64) {
        let (dc, dcu) = self.dc_at_u(u);
        let a = u.exp();
        let dm = self.transverse_from_comoving(dc);
        (a * dm, a * dm + a * self.transverse_derivative(dc) * dcu)
    }

    /// D_M/(1+z) and its u-derivative.
    #[inline]
    fn angular_at_u(&self, u: f64) -> (f64, f64) {
        let (dc, dcu) = self.dc_at_u(u);
        let ia = (-u).exp();
        let dm = self.transverse_from_comoving(dc);
        (
            ia * dm,
            -ia * dm + ia * self.transverse_derivative(dc) * dcu,
        )
    }

    /// The parameters.
    pub fn params(&self) -> &CosmologyParams {
        &self.params
    }

    /// Hubble distance c/H0, Mpc.
    pub fn hubble_distance(&self) -> f64 {
        self.d_h
    }

    /// Largest redshift the table covers.
    pub fn z_max(&self) -> f64 {
        self.u_max.exp_m1()
    }

    /// Error unless the table covers [0, z].
    pub fn ensure_covers(&self, z: f64) -> Result<(), PhysicsError> {
        if z <= self.z_max() {
            return Ok(());
        }
        match self.no_expansion {
            Some((zb, e2)) => Err(PhysicsError::NoExpansion { z: zb, e2 }),
            None => Err(PhysicsError::BeyondTable {
                z,
                z_max: self.z_max(),
            }),
        }
    }

    /// E(z) = H(z)/H0.
    pub fn efunc(&self, z: f64) -> f64 {
        self.params.e2(z).sqrt()
    }

    /// H(z) in km/s/Mpc.
    pub fn hubble(&self, z: f64) -> f64 {
        self.params.h0 * self.efunc(z)
    }

    fn check_z(&self, z: f64) -> Result<f64, PhysicsError> {
        if !z.is_finite() {
            return Err(PhysicsError::NotFinite {
                quantity: "redshift",
                value: z,
            });
        }
        if z <= -1.0 {
            return Err(PhysicsError::RedshiftNotAboveMinusOne { value: z });
        }
        if z < 0.0 {
            // Blueshifted objects have no cosmological distance in an expanding model.
            return Err(PhysicsError::NotPositive {
                quantity: "cosmological redshift",
                value: z,
            });
        }
        self.ensure_covers(z)?;
        Ok(z.ln_1p())
    }

    /// Quintic Hermite interpolation of D_C and its u-derivative at u.
    #[inline]
    fn dc_at_u(&self, u: f64) -> (f64, f64) {
        let last = self.dc.len() - 2;
        let i = ((u / self.h) as usize).min(last);
        let t = (u - i as f64 * self.h) / self.h;
        let h = self.h;
        let (y0, y1) = (self.dc[i], self.dc[i + 1]);
        let (d0, d1) = (self.dc1[i] * h, self.dc1[i + 1] * h);
        let (s0, s1) = (self.dc2[i] * h * h, self.dc2[i + 1] * h * h);
        let t2 = t * t;
        let t3 = t2 * t;
        let t4 = t3 * t;
        let t5 = t4 * t;
        let h1 = 10.0 * t3 - 15.0 * t4 + 6.0 * t5;
        let h0 = 1.0 - h1;
        let g0 = t - 6.0 * t3 + 8.0 * t4 - 3.0 * t5;
        let g1 = -4.0 * t3 + 7.0 * t4 - 3.0 * t5;
        let k0 = 0.5 * (t2 - 3.0 * t3 + 3.0 * t4 - t5);
        let k1 = 0.5 * (t3 - 2.0 * t4 + t5);
        let value = y0 * h0 + y1 * h1 + d0 * g0 + d1 * g1 + s0 * k0 + s1 * k1;
        // Derivatives of the basis in t.
        let h1p = 30.0 * t2 - 60.0 * t3 + 30.0 * t4;
        let g0p = 1.0 - 18.0 * t2 + 32.0 * t3 - 15.0 * t4;
        let g1p = -12.0 * t2 + 28.0 * t3 - 15.0 * t4;
        let k0p = 0.5 * (2.0 * t - 9.0 * t2 + 12.0 * t3 - 5.0 * t4);
        let k1p = 0.5 * (3.0 * t2 - 8.0 * t3 + 5.0 * t4);
        let dvalue = ((y1 - y0) * h1p + d0 * g0p + d1 * g1p + s0 * k0p + s1 * k1p) / h;
        (value, dvalue)
    }

    /// Line-of-sight comoving distance D_C(z), Mpc (Hogg 1999, eq. 15).
    pub fn comoving_distance(&self, z: f64) -> Result<f64, PhysicsError> {
        let u = self.check_z(z)?;
        Ok(self.dc_at_u(u).0)
    }

    /// dD_C/dz = D_H / E(z), Mpc.
    pub fn comoving_distance_derivative(&self, z: f64) -> f64 {
        self.d_h / self.efunc(z)
    }

    /// D_M from D_C (Hogg 1999, eq. 16): sinh for Ω_k > 0, sin for Ω_k < 0.
    #[inline]
    pub fn transverse_from_comoving(&self, dc: f64) -> f64 {
        let ok = self.omega_k;
        if ok.abs() < 1e-12 {
            dc
        } else if ok > 0.0 {
            let s = ok.sqrt();
            self.d_h / s * (s * dc / self.d_h).sinh()
        } else {
            let s = (-ok).sqrt();
            self.d_h / s * (s * dc / self.d_h).sin()
        }
    }

    /// dD_M/dD_C.
    #[inline]
    pub fn transverse_derivative(&self, dc: f64) -> f64 {
        let ok = self.omega_k;
        if ok.abs() < 1e-12 {
            1.0
        } else if ok > 0.0 {
            (ok.sqrt() * dc / self.d_h).cosh()
        } else {
            ((-ok).sqrt() * dc / self.d_h).cos()
        }
    }

    /// D_C from D_M, on the branch where D_M grows with D_C. Closed models have a largest
    /// D_M, D_H/√|Ω_k|, beyond which there is no solution.
    fn comoving_from_transverse(&self, dm: f64) -> Result<f64, PhysicsError> {
        let ok = self.omega_k;
        if ok.abs() < 1e-12 {
            Ok(dm)
        } else if ok > 0.0 {
            let s = ok.sqrt();
            Ok(self.d_h / s * (s * dm / self.d_h).asinh())
        } else {
            let s = (-ok).sqrt();
            let x = s * dm / self.d_h;
            if x > 1.0 {
                return Err(PhysicsError::DistanceOutOfReach {
                    what: "transverse comoving distance above the closed model's maximum",
                    distance: dm,
                    z_max: self.z_max(),
                });
            }
            Ok(self.d_h / s * x.asin())
        }
    }

    /// Transverse comoving distance D_M(z), Mpc.
    pub fn transverse_comoving_distance(&self, z: f64) -> Result<f64, PhysicsError> {
        Ok(self.transverse_from_comoving(self.comoving_distance(z)?))
    }

    /// Luminosity distance D_L = (1+z) D_M, Mpc (Hogg 1999, eq. 21).
    pub fn luminosity_distance(&self, z: f64) -> Result<f64, PhysicsError> {
        Ok((1.0 + z) * self.transverse_comoving_distance(z)?)
    }

    /// Angular-diameter distance D_A = D_M/(1+z), Mpc (Hogg 1999, eq. 18).
    pub fn angular_diameter_distance(&self, z: f64) -> Result<f64, PhysicsError> {
        Ok(self.transverse_comoving_distance(z)? / (1.0 + z))
    }

    /// Distance modulus μ = 5 log10(D_L / 10 pc) (Hogg 1999, eq. 25).
    pub fn distance_modulus(&self, z: f64) -> Result<f64, PhysicsError> {
        Ok(distance_modulus_of(self.luminosity_distance(z)?))
    }

    /// All distances at once.
    pub fn distances(&self, z: f64) -> Result<Distances, PhysicsError> {
        let d_c = self.comoving_distance(z)?;
        let d_m = self.transverse_from_comoving(d_c);
        let d_l = (1.0 + z) * d_m;
        Ok(Distances {
            z,
            d_c,
            d_m,
            d_l,
            d_a: d_m / (1.0 + z),
            mu: distance_modulus_of(d_l),
        })
    }

    /// D_C(z) by direct composite Gauss–Legendre quadrature, independent of the table; for
    /// checks. `panels` cells of 10 points each in u = ln(1+z).
    pub fn comoving_distance_quadrature(&self, z: f64, panels: usize) -> f64 {
        let (gx, gw) = gauss_legendre(GL_POINTS);
        let u_end = z.ln_1p();
        let h = u_end / panels as f64;
        let mut acc = 0.0;
        for p in 0..panels {
            let a = p as f64 * h;
            let mut s = 0.0;
            for (x, w) in gx.iter().zip(&gw) {
                let u = a + 0.5 * h * (x + 1.0);
                s += w * self.d_h * u.exp() / self.params.e2(u.exp_m1()).sqrt();
            }
            acc += 0.5 * h * s;
        }
        acc
    }

    /// Solve g(u) = target for u in [0, u_hi] where g increases; `g` returns value and
    /// derivative. The cell holding the root is found by bisection over the table nodes,
    /// then safeguarded Newton runs inside that cell (a step leaving the bracket is replaced
    /// by bisection), so a solve costs a dozen node look-ups and two or three Newton steps.
    fn solve_increasing(
        &self,
        g: impl Fn(f64) -> (f64, f64),
        nodes: &[f64],
        target: f64,
        u_hi: f64,
        what: &'static str,
    ) -> Result<f64, PhysicsError> {
        let n_hi = ((u_hi / self.h).floor() as usize).min(nodes.len() - 1);
        let top = if n_hi as f64 * self.h >= u_hi {
            nodes[n_hi]
        } else {
            g(u_hi).0
        };
        if !(target >= nodes[0] && target <= top) {
            return Err(PhysicsError::DistanceOutOfReach {
                what,
                distance: target,
                z_max: u_hi.exp_m1(),
            });
        }
        // The cell holding the root, by binary search over the node values.
        let i_lo = nodes[..=n_hi]
            .partition_point(|v| *v <= target)
            .saturating_sub(1);
        let mut lo = i_lo as f64 * self.h;
        let (mut hi, gh) = if i_lo < n_hi {
            ((i_lo + 1) as f64 * self.h, nodes[i_lo + 1])
        } else {
            (u_hi, top)
        };
        let glo = nodes[i_lo];
        let mut u = if gh > glo {
            lo + (hi - lo) * ((target - glo) / (gh - glo)).clamp(0.0, 1.0)
        } else {
            lo
        };
        for _ in 0..100 {
            let (v, dv) = g(u);
            let f = v - target;
            if f == 0.0 {
                return Ok(u);
            }
            if f > 0.0 {
                hi = u;
            } else {
                lo = u;
            }
            let mut next = if dv > 0.0 { u - f / dv } else { f64::NAN };
            if !(next > lo && next < hi) {
                next = 0.5 * (lo + hi);
            }
            if (next - u).abs() <= 4.0 * f64::EPSILON * (1.0 + u.abs())
                || hi - lo <= 4.0 * f64::EPSILON
            {
                return Ok(next);
            }
            u = next;
        }
        Ok(u)
    }

    /// Redshift at which the comoving distance is `dc` Mpc.
    pub fn z_from_comoving(&self, dc: f64) -> Result<f64, PhysicsError> {
        check_distance("comoving distance", dc)?;
        let u = self.solve_increasing(
            |u| self.dc_at_u(u),
            &self.dc,
            dc,
            self.u_max,
            "comoving distance",
        )?;
        Ok(u.exp_m1())
    }

    /// Redshift at which the transverse comoving distance is `dm` Mpc.
    pub fn z_from_transverse(&self, dm: f64) -> Result<f64, PhysicsError> {
        check_distance("transverse comoving distance", dm)?;
        self.z_from_comoving(self.comoving_from_transverse(dm)?)
    }

    /// Redshift at which (1+z) D_M(z) equals `dl` Mpc (the FLRW luminosity distance).
    pub fn z_from_luminosity(&self, dl: f64) -> Result<f64, PhysicsError> {
        check_distance("luminosity distance", dl)?;
        let u = self.solve_increasing(
            |u| self.luminosity_at_u(u),
            &self.lum_nodes,
            dl,
            self.u_lum_limit,
            "luminosity distance",
        )?;
        Ok(u.exp_m1())
    }

    /// Redshift at which D_M(z)/(1+z) (the angular-diameter distance) equals `da` Mpc, on
    /// the lower branch (below the redshift where D_A peaks).
    pub fn z_from_angular_diameter(&self, da: f64) -> Result<f64, PhysicsError> {
        check_distance("angular-diameter distance", da)?;
        let u = self.solve_increasing(
            |u| self.angular_at_u(u),
            &self.ang_nodes,
            da,
            self.u_ang_limit,
            "angular-diameter distance (beyond the D_A maximum)",
        )?;
        Ok(u.exp_m1())
    }

    /// Redshift of the maximum of D_A (the top of the table when D_A keeps rising within it).
    pub fn z_angular_peak(&self) -> f64 {
        self.u_ang_limit.exp_m1()
    }

    /// Redshift beyond the D_A maximum (the upper branch, where D_A falls with z) at which
    /// D_A equals `da` Mpc; bisection in u = ln(1 + z) to the resolution of doubles, then one
    /// Newton step. An error when the table has no upper branch or `da` is off it.
    pub fn z_from_angular_diameter_upper(&self, da: f64) -> Result<f64, PhysicsError> {
        check_distance("angular-diameter distance", da)?;
        let (mut lo, mut hi) = (self.u_ang_limit, self.u_max);
        let f = |u: f64| self.angular_at_u(u).0 - da;
        if !(hi > lo && f(lo) >= 0.0 && f(hi) <= 0.0) {
            return Err(PhysicsError::DistanceOutOfReach {
                what: "angular-diameter distance (on the branch beyond the D_A maximum)",
                distance: da,
                z_max: self.u_max.exp_m1(),
            });
        }
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if mid <= lo || mid >= hi {
                break;
            }
            if f(mid) > 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let u = 0.5 * (lo + hi);
        let (v, dv) = self.angular_at_u(u);
        let u = if dv != 0.0 {
            (u - (v - da) / dv).clamp(lo, hi)
        } else {
            u
        };
        Ok(u.exp_m1())
    }

    /// Largest u up to which g keeps increasing (g′ > 0 from 0): the first node where the
    /// derivative turns, refined by bisection. Run once per cosmology.
    fn increasing_limit(&self, g: &impl Fn(f64) -> (f64, f64)) -> f64 {
        let n = self.dc.len() - 1;
        let Some(i) = (1..=n).find(|&i| g(i as f64 * self.h).1 <= 0.0) else {
            return self.u_max;
        };
        let (mut lo, mut hi) = ((i - 1) as f64 * self.h, i as f64 * self.h);
        for _ in 0..80 {
            let mid = 0.5 * (lo + hi);
            if g(mid).1 > 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        lo
    }
}

/// All distances at one redshift, Mpc and mag.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Distances {
    pub z: f64,
    pub d_c: f64,
    pub d_m: f64,
    pub d_l: f64,
    pub d_a: f64,
    pub mu: f64,
}

/// μ = 5 log10(D_L/Mpc) + 25.
#[inline]
pub fn distance_modulus_of(d_l_mpc: f64) -> f64 {
    5.0 * d_l_mpc.log10() + 25.0
}

/// D_L in Mpc from μ: 10^{(μ − 25)/5}.
#[inline]
pub fn luminosity_distance_of(mu: f64) -> f64 {
    10f64.powf((mu - 25.0) / 5.0)
}

fn check_distance(quantity: &'static str, d: f64) -> Result<(), PhysicsError> {
    if !d.is_finite() {
        return Err(PhysicsError::NotFinite { quantity, value: d });
    }
    if d <= 0.0 {
        return Err(PhysicsError::NotPositive { quantity, value: d });
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Gauss–Legendre with 10 points integrates polynomials up to degree 19 exactly.
    #[test]
    fn gauss_legendre_exact_for_polynomials() {
        let (x, w) = gauss_legendre(10);
        for k in 0..20 {
            let s: f64 = x.iter().zip(&w).map(|(x, w)| w * x.powi(k)).sum();
            let exact = if k % 2 == 1 {
                0.0
            } else {
                2.0 / (k as f64 + 1.0)
            };
            assert!((s - exact).abs() < 1e-14, "k={k}: {s} vs {exact}");
        }
    }

    /// The table interpolant against direct quadrature at off-node redshifts.
    #[test]
    fn table_matches_quadrature() {
        for p in [
            CosmologyParams::flat_lcdm(70.0, 0.3),
            CosmologyParams {
                omega_de: 0.5,
                ..CosmologyParams::flat_lcdm(70.0, 0.3)
            },
            CosmologyParams {
                w0: -0.8,
                wa: 0.5,
                omega_r: 8e-5,
                ..CosmologyParams::flat_lcdm(67.0, 0.31)
            },
        ] {
            let c = Cosmology::new(p).unwrap();
            for z in [1e-4, 0.0123, 0.3333, 1.777, 9.1] {
                let a = c.comoving_distance(z).unwrap();
                let b = c.comoving_distance_quadrature(z, 400);
                assert!((a - b).abs() / b < 1e-12, "z={z} {a} {b}");
            }
        }
    }

    /// Flat ΛCDM with Ω_m = 1 (Einstein–de Sitter) has D_C = 2 D_H (1 − 1/√(1+z))
    /// (Hogg 1999, discussion after eq. 16; textbook result).
    #[test]
    fn einstein_de_sitter_closed_form() {
        let c = Cosmology::new(CosmologyParams::flat_lcdm(70.0, 1.0)).unwrap();
        for z in [0.01f64, 0.5, 3.0, 15.0] {
            let exact = 2.0 * c.hubble_distance() * (1.0 - 1.0 / (1.0 + z).sqrt());
            assert!((c.comoving_distance(z).unwrap() - exact).abs() / exact < 1e-13);
        }
    }

    #[test]
    fn inverses_return_redshift() {
        let c = Cosmology::new(CosmologyParams {
            omega_de: 0.9,
            ..CosmologyParams::flat_lcdm(70.0, 0.3)
        })
        .unwrap();
        for z in [1e-4, 0.01, 0.2, 1.0, 2.9] {
            let d = c.distances(z).unwrap();
            assert!((c.z_from_comoving(d.d_c).unwrap() - z).abs() < 1e-12 * (1.0 + z));
            assert!((c.z_from_transverse(d.d_m).unwrap() - z).abs() < 1e-12 * (1.0 + z));
            assert!((c.z_from_luminosity(d.d_l).unwrap() - z).abs() < 1e-12 * (1.0 + z));
            if z < 1.2 {
                // Below the D_A maximum (z ≈ 1.6 here) the lower branch is the solution.
                assert!((c.z_from_angular_diameter(d.d_a).unwrap() - z).abs() < 1e-12 * (1.0 + z));
            } else {
                // Above it, the lower-branch solution has the same D_A at a smaller z.
                let low = c.z_from_angular_diameter(d.d_a).unwrap();
                assert!(low < z);
                assert!((c.angular_diameter_distance(low).unwrap() - d.d_a).abs() < 1e-9 * d.d_a);
            }
        }
    }

    /// q0 = Ω_m/2 − Ω_Λ and j0 = 1 for flat ΛCDM (standard results; Visser 2004).
    #[test]
    fn deceleration_and_jerk_flat_lcdm() {
        let (q0, j0) = CosmologyParams::flat_lcdm(70.0, 0.3).deceleration_jerk();
        assert!((q0 - (0.15 - 0.7)).abs() < 1e-14);
        assert!((j0 - 1.0).abs() < 1e-14);
    }

    #[test]
    fn non_expanding_model_is_reported() {
        // Ω_m = 0, Ω_de = 2 (closed, de Sitter-like with strong curvature) bounces:
        // E² = 2 − (1+z)² reaches 0 at z = √2 − 1.
        let p = CosmologyParams {
            h0: 70.0,
            omega_m: 0.0,
            omega_de: 2.0,
            omega_r: 0.0,
            w0: -1.0,
            wa: 0.0,
        };
        let c = Cosmology::new(p).unwrap();
        assert!(c.z_max() < 2f64.sqrt() - 1.0);
        assert!(matches!(
            c.ensure_covers(1.0),
            Err(PhysicsError::NoExpansion { .. })
        ));
    }
}
