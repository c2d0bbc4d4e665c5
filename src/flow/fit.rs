//! The maximum-likelihood flow fit on a sample (Kaiser 1988, in `physics::dipole_likelihood`), in the
//! chosen fit space: the data vectors, which rows can enter, and the fit of a subset. The
//! bulk-flow stage and the outlier residual loop both fit through here.

use crate::physics::cosmology::Cosmology;
use crate::physics::dipole_likelihood::{
    eta_per_velocity, fit_bulk_flow, BulkFlowFit, FlowData, SigmaStar,
};
use crate::settings::FitSpace;

use super::{FlowError, FlowSample};

/// The data vector of the fit space: (y, σ, κ) per row.
pub fn fit_vectors(
    sample: &FlowSample,
    cosmology: &Cosmology,
    space: FitSpace,
) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let n = sample.len();
    match space {
        FitSpace::Velocity => (sample.v_pec.clone(), sample.v_pec_err.clone(), vec![1.0; n]),
        FitSpace::Eta => {
            let kappa = sample
                .z_cmb
                .iter()
                .map(|z| eta_per_velocity(cosmology, *z).unwrap_or(f64::NAN))
                .collect();
            (sample.eta.clone(), sample.eta_err.clone(), kappa)
        }
    }
}

/// Rows that can enter a fit: usable, with finite data, a positive error and a finite κ.
pub(crate) fn fittable(sample: &FlowSample, y: &[f64], e: &[f64], k: &[f64]) -> Vec<bool> {
    (0..sample.len())
        .map(|i| {
            sample.usable[i]
                && y[i].is_finite()
                && e[i].is_finite()
                && e[i] > 0.0
                && k[i].is_finite()
        })
        .collect()
}

/// Fit the flow to the rows marked in `keep`; returns the fit and the rows used.
pub(crate) fn fit_subset(
    sample: &FlowSample,
    y: &[f64],
    e: &[f64],
    k: &[f64],
    keep: &[bool],
    sigma_star: SigmaStar,
) -> Result<(BulkFlowFit, Vec<usize>), FlowError> {
    let idx: Vec<usize> = (0..keep.len()).filter(|&i| keep[i]).collect();
    let dirs: Vec<[f64; 3]> = idx.iter().map(|&i| sample.directions[i]).collect();
    let (yy, ee, kk): (Vec<f64>, Vec<f64>, Vec<f64>) = (
        idx.iter().map(|&i| y[i]).collect(),
        idx.iter().map(|&i| e[i]).collect(),
        idx.iter().map(|&i| k[i]).collect(),
    );
    let fit = fit_bulk_flow(
        &FlowData {
            directions: &dirs,
            values: &yy,
            errors: &ee,
            kappa: &kk,
        },
        sigma_star,
    )
    .map_err(FlowError::Fit)?;
    Ok((fit, idx))
}
