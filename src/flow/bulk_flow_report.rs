//! The bulk-flow stage: the maximum-likelihood dipole of a sample (Kaiser 1988), reported in
//! Galactic, supergalactic and equatorial axes, with the ΛCDM expectation for the sample's
//! own window (Watkins, Feldman & Hudson 2009) when asked for.

use serde::{Deserialize, Serialize};

use crate::physics::cosmology::Cosmology;
use crate::physics::dipole_likelihood::{amplitude_direction, BulkFlowFit, SigmaStar};
use crate::physics::sky::{Rotation, SkyFrame, SkyRotations};

use super::fit::{fit_subset, fit_vectors, fittable};
use super::{FlowError, FlowSample};
use crate::settings::FitSpace;

/// serde_json writes a number that is not finite (an amplitude error of a zero flow, say) as
/// `null`; these read `null` back as NaN, so that every report written can be read.
mod null_as_nan {
    use serde::{Deserialize, Deserializer};

    fn nan(v: Option<f64>) -> f64 {
        v.unwrap_or(f64::NAN)
    }

    pub fn number<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
        Ok(nan(Option::deserialize(d)?))
    }

    pub fn vector<'de, D: Deserializer<'de>>(d: D) -> Result<[f64; 3], D::Error> {
        Ok(<[Option<f64>; 3]>::deserialize(d)?.map(nan))
    }

    pub fn matrix<'de, D: Deserializer<'de>>(d: D) -> Result<[[f64; 3]; 3], D::Error> {
        Ok(<[[Option<f64>; 3]; 3]>::deserialize(d)?.map(|row| row.map(nan)))
    }
}

/// A vector and its covariance in one set of axes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AxesReport {
    #[serde(deserialize_with = "null_as_nan::vector")]
    pub v: [f64; 3],
    #[serde(deserialize_with = "null_as_nan::matrix")]
    pub cov: [[f64; 3]; 3],
}

/// ΛCDM comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LcdmComparison {
    /// Expected rms of each Galactic component of the measured flow from cosmic variance, km/s.
    #[serde(deserialize_with = "null_as_nan::vector")]
    pub lcdm_rms: [f64; 3],
    /// Expected covariance (cosmic variance only), Galactic axes, (km/s)².
    #[serde(deserialize_with = "null_as_nan::matrix")]
    pub lcdm_cov: [[f64; 3]; 3],
    /// χ² of the measured flow against zero with covariance = noise + cosmic variance.
    #[serde(deserialize_with = "null_as_nan::number")]
    pub chi2: f64,
    pub dof: usize,
    /// P(χ²₃ ≥ chi2).
    #[serde(deserialize_with = "null_as_nan::number")]
    pub probability: f64,
    #[serde(deserialize_with = "null_as_nan::number")]
    pub growth_rate: f64,
    #[serde(deserialize_with = "null_as_nan::number")]
    pub sigma8: f64,
    /// How the window was computed.
    pub window: String,
    pub power_spectrum: String,
}

/// The report (`flowsift bulkflow --json`, and the bulk-flow JSON file, which adds the run's
/// `record`; read back by `catalogue::bulk_flow_file`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BulkFlowReport {
    /// Flow and its noise covariance in Galactic Cartesian axes (x → l = 0, y → l = 90°,
    /// z → NGP), km/s and (km/s)².
    pub galactic: AxesReport,
    #[serde(deserialize_with = "null_as_nan::number")]
    pub amplitude: f64,
    /// First-order error of the amplitude (the amplitude itself is biased high when it is
    /// not many times its error).
    #[serde(deserialize_with = "null_as_nan::number")]
    pub amplitude_err: f64,
    /// Galactic direction, degrees.
    #[serde(deserialize_with = "null_as_nan::number")]
    pub l: f64,
    #[serde(deserialize_with = "null_as_nan::number")]
    pub b: f64,
    pub supergalactic: AxesReport,
    pub equatorial: AxesReport,
    /// What was fitted and how well.
    pub fit: FitSummary,
    pub lcdm: Option<LcdmComparison>,
    pub cautions: Vec<String>,
}

/// The fit behind a bulk-flow report.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitSummary {
    /// The quantity fitted: η (default) or the radial velocity.
    pub quantity: FitSpace,
    pub n_used: usize,
    /// Intrinsic dispersion σ_*, km/s.
    #[serde(deserialize_with = "null_as_nan::number")]
    pub sigma_star: f64,
    pub sigma_star_fitted: bool,
    /// χ² of the fitted flow's residuals.
    #[serde(deserialize_with = "null_as_nan::number")]
    pub chi2: f64,
}

fn rotate<A: SkyFrame, B: SkyFrame>(
    r: &Rotation<A, B>,
    v: [f64; 3],
    cov: [[f64; 3]; 3],
) -> AxesReport {
    let m = r.matrix();
    let v2 = r.apply_vector(v);
    let mut c2 = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            let mut s = 0.0;
            for a in 0..3 {
                for b in 0..3 {
                    s += m[i][a] * cov[a][b] * m[j][b];
                }
            }
            c2[i][j] = s;
        }
    }
    AxesReport { v: v2, cov: c2 }
}

/// Computes the ΛCDM expectation from a fit, the objects' positions (Mpc) and their κ.
pub type LcdmHook<'a> =
    dyn Fn(&BulkFlowFit, &[[f64; 3]], &[f64]) -> Result<LcdmComparison, FlowError> + 'a;

/// Fit the sample's flow; `lcdm` computes the expectation from the fit's weights.
pub fn bulk_flow(
    sample: &FlowSample,
    cosmology: &Cosmology,
    space: FitSpace,
    sigma_star: SigmaStar,
    lcdm: Option<&LcdmHook<'_>>,
) -> Result<BulkFlowReport, FlowError> {
    let (y, e, k) = fit_vectors(sample, cosmology, space);
    let keep = fittable(sample, &y, &e, &k);
    let (fit, idx) = fit_subset(sample, &y, &e, &k, &keep, sigma_star)?;
    let kk: Vec<f64> = idx.iter().map(|&i| k[i]).collect();
    let (amplitude, l, b, amplitude_err) = amplitude_direction(fit.v, fit.cov);
    let rot = SkyRotations::default();
    let supergalactic = rotate(&rot.galactic_to_supergalactic, fit.v, fit.cov);
    let equatorial = rotate(&rot.icrs_to_galactic.inverse(), fit.v, fit.cov);
    // Positions for the window: D_C(z_cmb) r̂ (redshift space, less noisy than distances).
    let positions: Vec<[f64; 3]> = idx
        .iter()
        .map(|&i| {
            let r = cosmology
                .comoving_distance(sample.z_cmb[i])
                .unwrap_or(f64::NAN);
            let d = sample.directions[i];
            [d[0] * r, d[1] * r, d[2] * r]
        })
        .collect();
    let lcdm = match lcdm {
        Some(f) => Some(f(&fit, &positions, &kk)?),
        None => None,
    };
    let mut cautions = vec![
        format!(
            "Flow fitted to {} of {} objects{}; σ_* {} = {:.0} km/s.",
            if space == FitSpace::Eta { "η" } else { "the radial velocity" },
            fit.n_used,
            if space == FitSpace::Eta { " (κ = ∂η/∂v from the cosmology)" } else { "" },
            if fit.sigma_star_fitted { "fitted" } else { "fixed" },
            fit.sigma_star
        ),
        "The amplitude of a noisy vector is biased high; compare components, or the χ² against ΛCDM, rather than the amplitude.".into(),
    ];
    if space == FitSpace::Velocity {
        cautions.push("Velocities from log-normal distances have skewed errors; the η fit is the less biased choice.".into());
    }
    Ok(BulkFlowReport {
        galactic: AxesReport {
            v: fit.v,
            cov: fit.cov,
        },
        amplitude,
        amplitude_err,
        l,
        b,
        supergalactic,
        equatorial,
        fit: FitSummary {
            quantity: space,
            n_used: fit.n_used,
            sigma_star: fit.sigma_star,
            sigma_star_fitted: fit.sigma_star_fitted,
            chi2: fit.chi2,
        },
        lcdm,
        cautions,
    })
}
