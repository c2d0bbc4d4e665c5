//! `growth`: the maximum-likelihood fσ8 of a flowsift output (`flow::growth`), with the
//! velocity covariance of linear theory for fσ8 = 1 at the objects' redshift-space positions,
//! optionally after averaging the objects in cubic cells.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use nalgebra::DMatrix;

use crate::flow::growth::{fit_growth, GrowthData, ProfilePoint, SigmaV};
use crate::flow::velocity_data::{average_in_cells, velocity_objects, SampleQuantity};
use crate::flow::FlowSample;
use crate::physics::power::{
    growth_rate_of, largest_distance, radial_velocity_covariance, RadialVelocityCorrelation,
};
use crate::plan::StagePlan;
use crate::settings::short_number;

use super::covariance::{
    checked_k_max, cosmology_for, fiducial, model_cautions, power_for, read_input, stage_record,
    FiducialModel,
};
use super::RunError;

/// The most objects (or cells) `growth` takes unless told otherwise.
pub const DEFAULT_MAX_OBJECTS: usize = 4000;

/// What `growth` was asked for.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct GrowthChoice {
    /// eta (default) or velocity.
    pub quantity: SampleQuantity,
    /// σ_v fixed at this many km/s; absent: fitted.
    pub sigma_v: Option<f64>,
    /// Fit a zero-point offset of the distance moduli.
    pub zero_point: bool,
    /// Average objects in cubic cells of this side, Mpc.
    pub bin_cells_mpc: Option<f64>,
    /// Upper wavenumber, h Mpc⁻¹ (default 0.2).
    pub k_max: Option<f64>,
    pub omega_b: Option<f64>,
    pub n_s: Option<f64>,
    /// Refuse more objects (or cells) than this.
    pub max_objects: usize,
    pub include_outliers: bool,
}

/// The cells, when objects were averaged.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct CellSummary {
    /// Side of the cells, Mpc.
    pub side_mpc: f64,
    pub cells: usize,
    /// Objects averaged into them.
    pub objects: usize,
    /// Most objects in one cell.
    pub largest: usize,
}

/// The result (`flowsift growth --json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct GrowthReport {
    pub fsigma8: f64,
    /// Lower end of the 68 % profile-likelihood interval (0 when it reaches zero).
    pub fsigma8_lo: f64,
    /// Upper end (null when it reaches the top of the grid, fσ8 = 2).
    pub fsigma8_hi: Option<f64>,
    /// Nonlinear velocity dispersion, km/s.
    pub sigma_v: f64,
    pub sigma_v_fitted: bool,
    /// Zero-point offset of the distance moduli, mag (when fitted).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub zero_point: Option<f64>,
    /// Objects (or cells) in the likelihood.
    pub n_used: usize,
    /// Usable rows of the input.
    pub n_objects: usize,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cells: Option<CellSummary>,
    pub quantity: SampleQuantity,
    /// ln L at the maximum, with all constants.
    pub log_likelihood: f64,
    /// The fiducial model of the covariance shape (its σ8 and f are those of the shape only:
    /// the amplitude is the fitted fσ8).
    pub fiducial: FiducialModel,
    /// The profile likelihood on a grid of fσ8 (0 to 2 in steps of 0.005).
    pub likelihood_grid: Vec<ProfilePoint>,
    /// How the fit was made, in words.
    pub method: String,
    pub cautions: Vec<String>,
}

/// `growth`.
pub fn run_growth(
    plan: &StagePlan,
    choice: &GrowthChoice,
) -> Result<(GrowthReport, Vec<String>), RunError> {
    if choice.quantity == SampleQuantity::Mu {
        return Err(RunError::Failed(
            "growth fits η or velocities (--quantity eta|velocity)".into(),
        ));
    }
    let k_max = checked_k_max(choice.k_max)?;
    let table = read_input(plan)?;
    let cosmology = cosmology_for(plan, &table)?;
    let sample = FlowSample::from_table(&table, !choice.include_outliers)?;
    let objects = velocity_objects(
        &sample,
        &cosmology,
        choice.quantity,
        plan.shared.convention,
        true,
    );
    let n_objects = objects.len();
    let shift = objects.zero_point_shift(choice.quantity);
    let h = cosmology.params().little_h();
    let (positions, values, errors, per_v, disp_v, shifts, cells) = match choice.bin_cells_mpc {
        None => (
            objects.positions.clone(),
            objects.values.clone(),
            objects.errors.clone(),
            objects.per_velocity.clone(),
            objects.per_velocity.clone(),
            shift,
            None,
        ),
        Some(side) => {
            if !(side.is_finite() && side > 0.0) {
                return Err(RunError::Failed(format!(
                    "--bin-cells must be a positive length in Mpc, got {side}"
                )));
            }
            let c = average_in_cells(&objects, &shift, side * h);
            let summary = CellSummary {
                side_mpc: side,
                cells: c.values.len(),
                objects: n_objects,
                largest: c.members.iter().map(Vec::len).max().unwrap_or(0),
            };
            (
                c.positions,
                c.values,
                c.errors,
                c.per_velocity,
                c.dispersion_per_velocity,
                c.zero_point_shift,
                Some(summary),
            )
        }
    };
    let n = positions.len();
    if n > choice.max_objects {
        return Err(RunError::Failed(format!(
            "{}: {n} {} is more than the {} the likelihood takes on this machine (an N × N matrix reduced to tridiagonal form per σ_v tried); average objects in cells with --bin-cells MPC (e.g. --bin-cells 10), or raise --max-objects",
            plan.input.display(),
            if cells.is_some() { "cells" } else { "objects" },
            choice.max_objects
        )));
    }
    // The shape for fσ8 = 1: σ8 = 1 and f = 1.
    let (power, params) = power_for(&cosmology, 1.0, choice.omega_b, choice.n_s)?;
    let corr =
        RadialVelocityCorrelation::new(&power, 1.0, 2.0 * largest_distance(&positions), k_max);
    let c = radial_velocity_covariance(&corr, &positions, &|_| {});
    let unit = DMatrix::from_fn(n, n, |i, j| c[i * n + j] * per_v[i] * per_v[j]);
    let data = GrowthData {
        values,
        errors,
        kappa: disp_v,
        unit_covariance: unit,
        zero_point_shift: choice.zero_point.then_some(shifts),
    };
    let sigma_v = match choice.sigma_v {
        Some(v) => SigmaV::Fixed(v),
        None => SigmaV::Fit,
    };
    let fit = fit_growth(&data, sigma_v).map_err(|e| format!("{}: {e}", plan.input.display()))?;
    // The fiducial f σ8 of the run's cosmology, for the record of what the shape assumed.
    let base_sigma8 = crate::physics::power::PowerParams::planck2018().sigma8;
    let f_fid = growth_rate_of(cosmology.params(), 0.0);
    let fid = fiducial(
        &cosmology,
        &crate::physics::power::PowerParams {
            sigma8: base_sigma8,
            ..params
        },
        f_fid,
        false,
        k_max,
    );
    let mut cautions = model_cautions(k_max);
    cautions.push(format!(
        "fσ8 is the amplitude of the linear velocity covariance at z = 0 for this fiducial shape; compare with predictions at the sample's effective depth with care (fiducial ΛCDM fσ8 = {}).",
        short_number(fid.fsigma8)
    ));
    if choice.quantity == SampleQuantity::Velocity {
        cautions.push("Velocities from log-normal distances have skewed errors; η (the default) is nearly Gaussian.".into());
    }
    if cells.is_some() {
        cautions.push("Cells: each cell's velocity is taken at its members' mean position; the correlation averaged over a cell's volume is neglected.".into());
    }
    if fit.fsigma8_hi.is_infinite() {
        cautions.push("The 68 % interval reaches the top of the fσ8 grid (2): the upper end is not bounded by these data.".into());
    }
    let method = format!(
        "Gaussian likelihood L ∝ |C|^(-1/2) exp(-d'C⁻¹d/2), C = (fσ8)² C̃ + diag(σ² + κ²σ_v²), C̃ from the linear velocity covariance (Górski 1988; Watkins, Feldman & Hudson 2009 pair window); {}; 68 % interval from the profile likelihood (Δ ln L = 1/2); {} O(N³) reduction{}",
        if fit.sigma_v_fitted { "σ_v fitted" } else { "σ_v fixed" },
        fit.diagonalisations,
        if fit.diagonalisations == 1 { "" } else { "s" }
    );
    let report = GrowthReport {
        fsigma8: fit.fsigma8,
        fsigma8_lo: fit.fsigma8_lo,
        fsigma8_hi: fit.fsigma8_hi.is_finite().then_some(fit.fsigma8_hi),
        sigma_v: fit.sigma_v,
        sigma_v_fitted: fit.sigma_v_fitted,
        zero_point: fit.zero_point,
        n_used: fit.n_used,
        n_objects,
        cells,
        quantity: choice.quantity,
        log_likelihood: fit.log_likelihood,
        fiducial: fid,
        likelihood_grid: fit.profile,
        method,
        cautions,
    };
    let record = stage_record(plan, table.frame.height(), "growth", choice);
    if let Some(out) = &plan.output {
        let mut value =
            serde_json::to_value(&report).map_err(|e| RunError::Failed(e.to_string()))?;
        if let Some(m) = value.as_object_mut() {
            m.insert(
                "record".into(),
                serde_json::to_value(&record).map_err(|e| RunError::Failed(e.to_string()))?,
            );
        }
        crate::catalogue::write_json_atomically(out, &value, plan.force)?;
    }
    Ok((report, record.cautions))
}
