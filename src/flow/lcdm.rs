//! The ΛCDM expectation of a measured bulk flow.

use crate::physics::cosmology::Cosmology;
use crate::physics::dipole_likelihood::BulkFlowFit;
use crate::settings::short_number;

use super::bulk_flow_report::LcdmComparison;
use super::FlowError;
use crate::settings::BulkFlowChoice;

/// The ΛCDM expectation for a fitted flow: the covariance of the ML estimator under linear
/// theory, R_ij = (H0 f)²/(2π²) ∫ dk P(k) W²_ij(k), with the window W² built from the fit's
/// own weights on velocities (Watkins, Feldman & Hudson 2009, MNRAS 392, 743), summed
/// pair by pair with the k integral taken per separation for small samples and by an FFT
/// of the gridded weights for large ones
/// ([`lcdm_bulk_flow_covariance_auto`](crate::physics::power::lcdm_bulk_flow_covariance_auto);
/// the report's `window` says which), P(k) from the
/// Eisenstein & Hu (1998) transfer function normalised to σ8, and f = Ω_m^γ at z = 0 with γ from w
/// (Linder 2005). `positions` are in Mpc; `kappa` turns η weights into velocity weights.
pub fn lcdm_comparison(
    fit: &BulkFlowFit,
    positions_mpc: &[[f64; 3]],
    kappa: &[f64],
    cosmology: &Cosmology,
    choice: &BulkFlowChoice,
) -> Result<LcdmComparison, FlowError> {
    use crate::physics::power::{
        growth_rate_of, lcdm_bulk_flow_covariance_auto, LinearPower, PowerParams, WindowMethod,
    };
    let p = cosmology.params();
    let h = p.little_h();
    let base = PowerParams::planck2018();
    let params = PowerParams {
        h,
        omega_m: p.omega_m,
        // Default: the Planck 2018 physical baryon density Ω_b h² held fixed at this h.
        omega_b: choice
            .omega_b
            .unwrap_or(base.omega_b * base.h * base.h / (h * h)),
        t_cmb: base.t_cmb,
        n_s: choice.n_s.unwrap_or(base.n_s),
        sigma8: choice.sigma8.unwrap_or(base.sigma8),
    };
    if !(params.omega_b > 0.0 && params.omega_b < params.omega_m) {
        return Err(FlowError::Settings(format!(
            "bulk flow: omega_b = {} must lie between 0 and omega_m = {}",
            params.omega_b, params.omega_m
        )));
    }
    let power = LinearPower::new(params);
    let f = growth_rate_of(p, 0.0);
    let positions_h: Vec<[f64; 3]> = positions_mpc
        .iter()
        .map(|r| [r[0] * h, r[1] * h, r[2] * h])
        .collect();
    let weights: Vec<[f64; 3]> = fit
        .weights
        .iter()
        .zip(kappa)
        .map(|(w, k)| [w[0] * k, w[1] * k, w[2] * k])
        .collect();
    let (r, method) = lcdm_bulk_flow_covariance_auto(&power, f, &positions_h, &weights);
    let total = nalgebra::Matrix3::from_fn(|i, j| r[i][j] + fit.cov[i][j]);
    let inv = total
        .try_inverse()
        .ok_or_else(|| FlowError::Fit("the ΛCDM + noise covariance is singular".into()))?;
    let v = nalgebra::Vector3::from(fit.v);
    let chi2 = (v.transpose() * inv * v)[(0, 0)];
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    let probability = 1.0
        - ChiSquared::new(3.0)
            .map_err(|e| FlowError::Fit(e.to_string()))?
            .cdf(chi2);
    Ok(LcdmComparison {
        lcdm_rms: [r[0][0].sqrt(), r[1][1].sqrt(), r[2][2].sqrt()],
        lcdm_cov: r,
        chi2,
        dof: 3,
        probability,
        growth_rate: f,
        sigma8: params.sigma8,
        window: match method {
            WindowMethod::ExactPairSum => format!(
                "exact pair sum over the {} objects of the fit, positions D_C(z_cmb) r̂; k integrals per separation (tabulated in √A)",
                positions_mpc.len()
            ),
            WindowMethod::Mesh { cells, spacing } => format!(
                "FFT mesh over the {} objects of the fit, positions D_C(z_cmb) r̂: cloud-in-cell weights on {cells}³ cells of {} h⁻¹ Mpc, convolved by FFT on a zero-padded {}³ mesh with the velocity correlation tensor tabulated from the k integrals (Hockney & Eastwood isolated-system convolution), own pairs exact; agrees with the exact pair sum to better than 1 % (tests/lcdm_window.rs)",
                positions_mpc.len(),
                short_number((spacing * 100.0).round() / 100.0),
                2 * cells
            ),
        },
        power_spectrum: format!(
            "Eisenstein & Hu (1998) with baryon wiggles, h = {}, Ω_m = {}, Ω_b = {}, n_s = {}, σ8 = {}; f = Ω_m^γ (Linder 2005) = {:.4}",
            short_number(params.h),
            short_number(params.omega_m),
            short_number(params.omega_b),
            short_number(params.n_s),
            short_number(params.sigma8),
            f
        ),
    })
}
