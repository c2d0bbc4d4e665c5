//! `bulkflow --weights mv` and `bulkflow --monopole`: the minimum-variance moments
//! (`flow::minimum_variance`) and the fit with a zero-point term (`flow::monopole`), added
//! to the bulk-flow report as new keys (`weights`, `minimum_variance`, `monopole`).
#![allow(clippy::needless_range_loop)] // small vectors and matrices read best with indices

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::flow::bulk_flow_report::BulkFlowReport;
use crate::flow::minimum_variance::{ideal_survey, minimum_variance_weights, MvObjects};
use crate::flow::monopole::{fit_flow_with_monopole, MonopoleData};
use crate::flow::velocity_data::{velocity_objects, SampleQuantity};
use crate::flow::FlowSample;
use crate::physics::dipole_likelihood::SigmaStar;
use crate::physics::power::{
    growth_rate_of, largest_distance, PowerParams, RadialVelocityCorrelation,
};
use crate::plan::StagePlan;
use crate::settings::{short_number, FitSpace};

use super::covariance::{checked_k_max, cosmology_for, power_for, read_input, stage_record};
use super::sample_stages::bulk_flow_of_table;
use super::RunError;

/// Which weights make the reported moments.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum FlowWeights {
    /// Maximum likelihood (Kaiser 1988), the default.
    #[default]
    Ml,
    /// Minimum variance for an ideal Gaussian window (Watkins, Feldman & Hudson 2009).
    Mv,
}

/// The settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct FlowMomentsChoice {
    pub weights: FlowWeights,
    /// Scale R_I of the ideal survey's Gaussian radial profile, h⁻¹ Mpc.
    pub window_radius: Option<f64>,
    /// Points of the ideal survey.
    pub ideal_points: usize,
    /// Seed of the ideal survey's points.
    pub ideal_seed: u64,
    /// Upper wavenumber of the velocity correlations, h Mpc⁻¹ (default: all scales, 1000).
    pub k_max: Option<f64>,
    /// Fit a monopole (zero-point) term with the ML flow.
    pub monopole: bool,
}

/// The default scale of the ideal window, h⁻¹ Mpc (a common-practice choice).
pub const DEFAULT_WINDOW_RADIUS: f64 = 50.0;
/// Default points of the ideal survey.
pub const DEFAULT_IDEAL_POINTS: usize = 2000;
/// The most objects the MV weights take (an N × N Cholesky factorisation).
pub const MV_MAX_OBJECTS: usize = 6000;

/// The minimum-variance moments.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct MinimumVarianceReport {
    /// Gaussian radial scale R_I of the ideal survey, h⁻¹ Mpc.
    pub window_radius: f64,
    pub ideal_points: usize,
    pub ideal_seed: u64,
    /// The MV moments, Galactic Cartesian axes, km/s.
    pub v: [f64; 3],
    /// Noise covariance of the moments, (km/s)².
    pub noise_cov: [[f64; 3]; 3],
    /// Cosmic-variance covariance of the moments in linear ΛCDM, (km/s)².
    pub cosmic_cov: [[f64; 3]; 3],
    /// ⟨U Uᵀ⟩ of the ideal window in linear ΛCDM: the expectation for the same window, (km/s)².
    pub ideal_lcdm_cov: [[f64; 3]; 3],
    /// rms per component of the ideal window's flow, km/s.
    pub ideal_lcdm_rms: [f64; 3],
    /// ⟨(u − U)(u − U)ᵀ⟩: how far the moments may lie from the ideal window's flow, (km/s)².
    pub mismatch_cov: [[f64; 3]; 3],
    /// χ² of the moments against zero with covariance noise + cosmic variance, 3 dof.
    pub chi2: f64,
    /// P(χ²₃ ≥ chi2).
    pub probability: f64,
    /// σ_* used in the noise, km/s (that of the ML fit).
    pub sigma_star: f64,
    pub n_used: usize,
    pub k_max: f64,
    pub sigma8: f64,
    pub growth_rate: f64,
}

/// The ML flow with a monopole.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct MonopoleReport {
    /// Flow, Galactic Cartesian, km/s.
    pub v: [f64; 3],
    /// Its noise covariance, (km/s)².
    pub cov: [[f64; 3]; 3],
    /// Zero-point offset of the distance moduli, mag (data shifted by −δ/5 in η).
    pub zero_point: f64,
    pub zero_point_err: f64,
    pub sigma_star: f64,
    pub sigma_star_fitted: bool,
    pub chi2: f64,
    pub n_used: usize,
}

/// The new keys of the report.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct FlowMomentsReport {
    pub weights: FlowWeights,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub minimum_variance: Option<MinimumVarianceReport>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub monopole: Option<MonopoleReport>,
    pub cautions: Vec<String>,
}

fn quantity_of(space: FitSpace) -> SampleQuantity {
    match space {
        FitSpace::Eta => SampleQuantity::Eta,
        FitSpace::Velocity => SampleQuantity::Velocity,
    }
}

/// The bulk-flow report, the new keys, the whole JSON (report + new keys + `record`), and
/// the notes. Writes the JSON when the plan names an output.
pub fn run_flow_moments(
    plan: &StagePlan,
    choice: &FlowMomentsChoice,
) -> Result<
    (
        BulkFlowReport,
        FlowMomentsReport,
        serde_json::Value,
        Vec<String>,
    ),
    RunError,
> {
    let bulk = plan.config().bulk_flow.clone().unwrap_or_default().filled();
    let table = read_input(plan)?;
    let cosmology = cosmology_for(plan, &table)?;
    let report = bulk_flow_of_table(&table, &cosmology, &bulk)
        .map_err(|e| format!("{}: {e}", plan.input.display()))?;
    let sample = FlowSample::from_table(&table, !bulk.include_outliers.unwrap_or(false))?;
    let quantity = quantity_of(bulk.quantity.unwrap_or_default());
    let objects = velocity_objects(&sample, &cosmology, quantity, plan.shared.convention, true);
    let directions: Vec<[f64; 3]> = objects.rows.iter().map(|&i| sample.directions[i]).collect();
    let mut cautions = Vec::new();
    let monopole = if choice.monopole {
        let shift = objects.zero_point_shift(quantity);
        let sigma_star = bulk
            .sigma_star
            .map(SigmaStar::Fixed)
            .unwrap_or(SigmaStar::Fit);
        let fit = fit_flow_with_monopole(
            &MonopoleData {
                directions: &directions,
                values: &objects.values,
                errors: &objects.errors,
                kappa: &objects.per_velocity,
                shift: &shift,
            },
            sigma_star,
        )
        .map_err(|e| format!("{}: {e}", plan.input.display()))?;
        cautions.push("Monopole: a zero-point offset δ of the distance moduli fitted with the flow (η shifted by −δ/5); it absorbs a calibration offset and, with it, part of any real monopole of the flow.".into());
        Some(MonopoleReport {
            v: fit.v,
            cov: std::array::from_fn(|i| std::array::from_fn(|j| fit.cov[i][j])),
            zero_point: fit.zero_point,
            zero_point_err: fit.cov[3][3].sqrt(),
            sigma_star: fit.sigma_star,
            sigma_star_fitted: fit.sigma_star_fitted,
            chi2: fit.chi2,
            n_used: fit.n_used,
        })
    } else {
        None
    };
    let minimum_variance = if choice.weights == FlowWeights::Mv {
        let n = objects.len();
        if n > MV_MAX_OBJECTS {
            return Err(RunError::Failed(format!(
                "{}: {n} objects; the minimum-variance weights take at most {MV_MAX_OBJECTS} (an N × N factorisation)",
                plan.input.display()
            )));
        }
        let radius = choice.window_radius.unwrap_or(DEFAULT_WINDOW_RADIUS);
        if !(radius.is_finite() && radius > 0.0) {
            return Err(RunError::Failed(format!(
                "--window-radius must be a positive length in h⁻¹ Mpc, got {radius}"
            )));
        }
        if choice.ideal_points < 10 {
            return Err(RunError::Failed(
                "--ideal-points must be at least 10".into(),
            ));
        }
        let k_max = checked_k_max(Some(choice.k_max.unwrap_or(1000.0)))?;
        let sigma8 = bulk.sigma8.unwrap_or(PowerParams::planck2018().sigma8);
        let (power, _) = power_for(&cosmology, sigma8, bulk.omega_b, bulk.n_s)?;
        let f = growth_rate_of(cosmology.params(), 0.0);
        let ideal = ideal_survey(radius, choice.ideal_points, choice.ideal_seed);
        let reach = largest_distance(&objects.positions).max(largest_distance(&ideal));
        let corr = RadialVelocityCorrelation::new(&power, f, 2.0 * reach, k_max);
        let mv = minimum_variance_weights(
            &MvObjects {
                positions: &objects.positions,
                kappa: &objects.per_velocity,
                errors: &objects.errors,
                sigma_star: report.fit.sigma_star,
            },
            &ideal,
            &corr,
        )
        .map_err(|e| format!("{}: {e}", plan.input.display()))?;
        let v = mv.apply(&objects.values);
        let total = nalgebra::Matrix3::from_fn(|i, j| mv.noise_cov[i][j] + mv.cosmic_cov[i][j]);
        let vv = nalgebra::Vector3::from(v);
        let chi2 = total
            .try_inverse()
            .map(|inv| (vv.transpose() * inv * vv)[(0, 0)])
            .unwrap_or(f64::NAN);
        use statrs::distribution::{ChiSquared, ContinuousCDF};
        let probability = ChiSquared::new(3.0)
            .map(|d| 1.0 - d.cdf(chi2))
            .unwrap_or(f64::NAN);
        cautions.push(format!(
            "Minimum-variance moments (Watkins, Feldman & Hudson 2009) for an ideal survey of {} points with a Gaussian radial profile of R_I = {} h⁻¹ Mpc; linear ΛCDM correlations (σ8 = {}, f = {}, k ≤ {} h/Mpc) enter the weights, so the moments assume that model.",
            choice.ideal_points,
            short_number(radius),
            short_number(sigma8),
            short_number(f),
            short_number(k_max)
        ));
        Some(MinimumVarianceReport {
            window_radius: radius,
            ideal_points: choice.ideal_points,
            ideal_seed: choice.ideal_seed,
            v,
            noise_cov: mv.noise_cov,
            cosmic_cov: mv.cosmic_cov,
            ideal_lcdm_cov: mv.ideal_cov,
            ideal_lcdm_rms: std::array::from_fn(|i| mv.ideal_cov[i][i].sqrt()),
            mismatch_cov: mv.mismatch_cov,
            chi2,
            probability,
            sigma_star: report.fit.sigma_star,
            n_used: n,
            k_max,
            sigma8,
            growth_rate: f,
        })
    } else {
        None
    };
    let moments = FlowMomentsReport {
        weights: choice.weights,
        minimum_variance,
        monopole,
        cautions,
    };
    let mut record = stage_record(plan, table.frame.height(), "flow_moments", choice);
    record.settings.bulk_flow = Some(bulk.filled());
    let to = |e: serde_json::Error| RunError::Failed(e.to_string());
    let mut value = serde_json::to_value(&report).map_err(to)?;
    if let (Some(m), serde_json::Value::Object(extra)) = (
        value.as_object_mut(),
        serde_json::to_value(&moments).map_err(to)?,
    ) {
        for (k, v) in extra {
            if k == "cautions" {
                if let (Some(serde_json::Value::Array(base)), serde_json::Value::Array(more)) =
                    (m.get_mut("cautions"), v)
                {
                    base.extend(more);
                }
            } else {
                m.insert(k, v);
            }
        }
        if let Some(out) = &plan.output {
            let mut with_record = serde_json::Value::Object(m.clone());
            if let Some(w) = with_record.as_object_mut() {
                w.insert("record".into(), serde_json::to_value(&record).map_err(to)?);
            }
            crate::catalogue::write_json_atomically(out, &with_record, plan.force)?;
        }
    }
    Ok((report, moments, value, record.cautions))
}
