//! `covariance`: the linear-theory covariance of the radial peculiar velocities (or μ, or η)
//! of a flowsift output's usable rows, written as FITS or NumPy `.npy` with the settings.
//! Also the pieces `growth` and the flow moments share: the input sample, the cosmology
//! reaching it, the power spectrum and the stage record.

use std::path::{Path, PathBuf};

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::catalogue::covariance_file::{
    write_covariance_fits, write_covariance_npy, Card, CardValue,
};
use crate::catalogue::{write_json_atomically, RunRecord};
use crate::flow::velocity_data::{velocity_objects, SampleQuantity, VelocityObjects};
use crate::flow::FlowSample;
use crate::physics::cosmology::Cosmology;
use crate::physics::power::{
    growth_rate_of, largest_distance, power_params_for, radial_velocity_covariance, LinearPower,
    PowerParams, RadialVelocityCorrelation, LINEAR_K_MAX,
};
use crate::plan::StagePlan;
use crate::settings::short_number;

use super::RunError;

/// What `covariance` was asked for.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct CovarianceChoice {
    pub quantity: SampleQuantity,
    /// σ8 of the power spectrum (default Planck 2018).
    pub sigma8: Option<f64>,
    /// Growth rate f (default Ω_m^γ at z = 0 of the run's cosmology, Linder 2005).
    pub growth_rate: Option<f64>,
    /// Upper wavenumber of the k integrals, h Mpc⁻¹ (default [`LINEAR_K_MAX`]).
    pub k_max: Option<f64>,
    /// Nonlinear dispersion added on the diagonal, km/s (default none).
    pub sigma_v: Option<f64>,
    /// Ω_b (default Planck 2018's Ω_b h² at the run's h) and n_s (default Planck 2018).
    pub omega_b: Option<f64>,
    pub n_s: Option<f64>,
    /// Refuse matrices larger than this many bytes.
    pub max_memory_bytes: u64,
    /// Keep rows flagged as outliers.
    pub include_outliers: bool,
}

/// The default limit of `--max-memory`: 2 GB.
pub const DEFAULT_MAX_MEMORY_BYTES: u64 = 2_000_000_000;

/// The fiducial model behind a covariance.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct FiducialModel {
    pub h0: f64,
    pub omega_m: f64,
    pub omega_de: f64,
    pub omega_b: f64,
    pub n_s: f64,
    pub sigma8: f64,
    pub growth_rate: f64,
    pub fsigma8: f64,
    /// Upper wavenumber of the k integrals, h Mpc⁻¹.
    pub k_max: f64,
    /// The power spectrum and growth rate, in words, with their sources.
    pub power_spectrum: String,
}

/// The sidecar of a `.npy` covariance (and the summary of any covariance run).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct CovarianceSidecar {
    /// The matrix file.
    pub matrix: String,
    pub quantity: SampleQuantity,
    /// Unit of the elements (FITS unit string; empty for η).
    pub unit: String,
    pub shape: [usize; 2],
    /// 0-based input row of each matrix row.
    pub rows: Vec<usize>,
    pub fiducial: FiducialModel,
    /// σ_v added on the diagonal (as (∂q/∂v σ_v)²), km/s; 0 when not asked.
    pub sigma_v: f64,
    /// How the positions were made.
    pub positions: String,
    pub cautions: Vec<String>,
    /// The run's record (present in the sidecar file).
    #[serde(skip_serializing_if = "Option::is_none")]
    #[schemars(with = "Option<serde_json::Value>")]
    pub record: Option<RunRecord>,
}

/// The sidecar of a `.npy` output: `COV.npy` → `COV.npy.json`.
pub fn npy_sidecar(path: &Path) -> PathBuf {
    let mut s = path.as_os_str().to_owned();
    s.push(".json");
    PathBuf::from(s)
}

/// Whether a covariance output is `.npy` (otherwise FITS).
pub fn is_npy(path: &Path) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("npy"))
}

pub(crate) use super::standalone::{cosmology_for, read_input};

/// The stage's record: shared settings, the input's columns, `details` under `key`.
pub(crate) fn stage_record(
    plan: &StagePlan,
    rows: usize,
    key: &str,
    details: &impl Serialize,
) -> RunRecord {
    let mut r = super::standalone::stage_record(plan, rows);
    r.details.insert(
        key.into(),
        serde_json::to_string(details).unwrap_or_default(),
    );
    r
}

/// The power spectrum of the run's cosmology, checked.
pub(crate) fn power_for(
    cosmology: &Cosmology,
    sigma8: f64,
    omega_b: Option<f64>,
    n_s: Option<f64>,
) -> Result<(LinearPower, PowerParams), RunError> {
    let params = power_params_for(cosmology.params(), sigma8, omega_b, n_s);
    params
        .validate()
        .map_err(|e| RunError::Failed(format!("power spectrum: {e}")))?;
    Ok((LinearPower::new(params), params))
}

/// Check an upper wavenumber.
pub(crate) fn checked_k_max(k_max: Option<f64>) -> Result<f64, RunError> {
    let k = k_max.unwrap_or(LINEAR_K_MAX);
    if !(k.is_finite() && (0.005..=1000.0).contains(&k)) {
        return Err(RunError::Failed(format!(
            "--kmax must lie between 0.005 and 1000 h/Mpc, got {k}"
        )));
    }
    Ok(k)
}

/// The words for a fiducial model.
pub(crate) fn fiducial(
    cosmology: &Cosmology,
    params: &PowerParams,
    f: f64,
    f_given: bool,
    k_max: f64,
) -> FiducialModel {
    let c = cosmology.params();
    FiducialModel {
        h0: c.h0,
        omega_m: c.omega_m,
        omega_de: c.omega_de,
        omega_b: params.omega_b,
        n_s: params.n_s,
        sigma8: params.sigma8,
        growth_rate: f,
        fsigma8: f * params.sigma8,
        k_max,
        power_spectrum: format!(
            "linear P(k) at z = 0: Eisenstein & Hu (1998) transfer function with baryon wiggles, h = {}, Ω_m = {}, Ω_b = {}, n_s = {}, σ8 = {}; k ≤ {} h/Mpc; f = {}{}",
            short_number(params.h),
            short_number(params.omega_m),
            short_number(params.omega_b),
            short_number(params.n_s),
            short_number(params.sigma8),
            short_number(k_max),
            short_number(f),
            if f_given { " (given)" } else { " = Ω_m^γ at z = 0 (Linder 2005)" }
        ),
    }
}

/// The cautions every covariance-based result carries.
pub(crate) fn model_cautions(k_max: f64) -> Vec<String> {
    vec![
        "Linear theory: the covariance is that of a Gaussian, linear ΛCDM velocity field; nonlinear motions are not in it (add --sigma-v, or fit σ_v).".into(),
        format!(
            "Fiducial cosmology: the shape of P(k) comes from the run's cosmology and Planck 2018 Ω_b h² and n_s, unless given; k integrals stop at k_max = {} h/Mpc.",
            short_number(k_max)
        ),
        "σ8 and f are fiducial values at z = 0; the sample's depth is not folded into the growth factor.".into(),
        "Positions are redshift-space positions D_C(z_cmb) r̂ (h⁻¹ Mpc, Galactic axes), not the noisy distances.".into(),
    ]
}

/// Sizes known before the matrix is made.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MatrixSize {
    pub n: usize,
    pub bytes: u64,
}

/// `covariance`: returns the summary (the sidecar's content without the record). `on_size`
/// hears the matrix size before any work; `progress` hears (rows done, rows).
pub fn run_covariance(
    plan: &StagePlan,
    choice: &CovarianceChoice,
    output: &Path,
    on_size: &dyn Fn(MatrixSize),
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<CovarianceSidecar, RunError> {
    let k_max = checked_k_max(choice.k_max)?;
    let table = read_input(plan)?;
    let cosmology = cosmology_for(plan, &table)?;
    let sample = FlowSample::from_table(&table, !choice.include_outliers)?;
    let objects: VelocityObjects = velocity_objects(
        &sample,
        &cosmology,
        choice.quantity,
        plan.shared.convention,
        false,
    );
    let n = objects.len();
    let bytes = (n as u64) * (n as u64) * 8;
    on_size(MatrixSize { n, bytes });
    if bytes > choice.max_memory_bytes {
        return Err(RunError::Failed(format!(
            "{}: the {n} × {n} matrix needs {bytes} bytes (N² × 8), above --max-memory {}; raise the limit, or average objects in cells first",
            plan.input.display(),
            choice.max_memory_bytes
        )));
    }
    if n == 0 {
        return Err(RunError::Failed(format!(
            "{}: no usable rows (status ok, finite z_cmb, v_pec and eta)",
            plan.input.display()
        )));
    }
    let sigma8 = choice.sigma8.unwrap_or(PowerParams::planck2018().sigma8);
    let (power, params) = power_for(&cosmology, sigma8, choice.omega_b, choice.n_s)?;
    let f = match choice.growth_rate {
        Some(f) if f.is_finite() && f > 0.0 => f,
        Some(f) => {
            return Err(RunError::Failed(format!(
                "--growth-rate must be positive, got {f}"
            )))
        }
        None => growth_rate_of(cosmology.params(), 0.0),
    };
    let sigma_v = choice.sigma_v.unwrap_or(0.0);
    if !(sigma_v.is_finite() && sigma_v >= 0.0) {
        return Err(RunError::Failed(format!(
            "--sigma-v must be a non-negative number of km/s, got {sigma_v}"
        )));
    }
    let corr = RadialVelocityCorrelation::new(
        &power,
        f,
        2.0 * largest_distance(&objects.positions),
        k_max,
    );
    let mut matrix =
        radial_velocity_covariance(&corr, &objects.positions, &|done| progress(done, n));
    let d = &objects.per_velocity;
    for i in 0..n {
        for j in 0..n {
            matrix[i * n + j] *= d[i] * d[j];
        }
        matrix[i * n + i] += (d[i] * sigma_v).powi(2);
    }
    let fid = fiducial(&cosmology, &params, f, choice.growth_rate.is_some(), k_max);
    let mut cautions = model_cautions(k_max);
    if choice.quantity != SampleQuantity::Velocity {
        cautions.push(format!(
            "{} covariance: the velocity covariance times ∂q/∂v of each object at v = 0 (first order; luminosity-distance convention {:?}).",
            choice.quantity.name(),
            plan.shared.convention
        ));
    }
    let summary = CovarianceSidecar {
        matrix: output.display().to_string(),
        quantity: choice.quantity,
        unit: choice.quantity.squared_unit().into(),
        shape: [n, n],
        rows: objects.rows.clone(),
        fiducial: fid.clone(),
        sigma_v,
        positions: "D_C(z_cmb) r̂ in h⁻¹ Mpc, Galactic Cartesian axes".into(),
        cautions,
        record: None,
    };
    let record = stage_record(plan, table.frame.height(), "covariance", choice);
    if is_npy(output) {
        write_covariance_npy(output, &matrix, n)?;
        let sidecar = CovarianceSidecar {
            record: Some(record),
            ..summary.clone()
        };
        let value = serde_json::to_value(&sidecar).map_err(|e| RunError::Failed(e.to_string()))?;
        write_json_atomically(&npy_sidecar(output), &value, plan.force)?;
    } else {
        let rows: Vec<i64> = objects.rows.iter().map(|&r| r as i64).collect();
        let num = |key: &str, v: f64, c: &str| Card {
            key: key.into(),
            value: CardValue::Number(v),
            comment: c.into(),
        };
        let text = |key: &str, v: &str, c: &str| Card {
            key: key.into(),
            value: CardValue::Text(v.into()),
            comment: c.into(),
        };
        let cards = vec![
            text("QUANTITY", choice.quantity.name(), "velocity, mu or eta"),
            num("H0", fid.h0, "Hubble constant, km/s/Mpc"),
            num("OMEGA_M", fid.omega_m, "matter density"),
            num("OMEGA_DE", fid.omega_de, "dark-energy density"),
            num("OMEGA_B", fid.omega_b, "baryon density"),
            num("N_S", fid.n_s, "spectral index"),
            num(
                "SIGMA8",
                fid.sigma8,
                "rms density in 8 h-1 Mpc spheres, z = 0",
            ),
            num("GROWTHF", fid.growth_rate, "growth rate f = dlnD/dlna"),
            num("FSIGMA8", fid.fsigma8, "f sigma8 of the matrix"),
            num("KMAX", k_max, "upper wavenumber of the k integrals, h/Mpc"),
            num(
                "SIGMAV",
                sigma_v,
                "nonlinear dispersion on the diagonal, km/s",
            ),
            text(
                "DLCONV",
                &format!("{:?}", plan.shared.convention),
                "luminosity-distance convention",
            ),
            text(
                "PKMODEL",
                "Eisenstein & Hu (1998)",
                "linear transfer function",
            ),
            text(
                "POSITION",
                "D_C(z_cmb) in h-1 Mpc, Galactic",
                "positions of the objects",
            ),
            Card {
                key: "RECORD".into(),
                value: CardValue::Text(serde_json::to_string(&record).unwrap_or_default()),
                comment: "the run's record (JSON)".into(),
            },
        ];
        let mut comments = vec![fid.power_spectrum.clone()];
        comments.extend(summary.cautions.iter().cloned());
        write_covariance_fits(
            output,
            &matrix,
            &rows,
            choice.quantity.squared_unit(),
            &cards,
            &comments,
        )?;
    }
    Ok(summary)
}
