//! Outlier flags, never removing rows:
//!
//! (a) **residual**: |y − y_model| / sqrt(σ² + κ²σ_*²) > k about the maximum-likelihood bulk
//!     flow (Kaiser 1988, see `physics::dipole_likelihood`), iterated — fit without the flagged
//!     objects, flag again — until the flagged set no longer changes;
//! (b) **neighbours**: the velocity (or its η-equivalent y/κ) differs from the error-weighted
//!     mean of its k nearest neighbours in 3-D redshift space (positions D_C(z_cmb) r̂, a k-d
//!     tree) by more than the threshold in units of the combined error;
//! (c) **hard limits**: |v_pec| above a bound, η outside a range.
//!
//! The default space is η, whose errors are close to Gaussian for distances with log-normal
//! errors (Tully–Fisher, Fundamental Plane); velocities from such distances have skewed
//! errors, so a symmetric cut in velocity flags more objects on one side.

use std::num::NonZero;

use kiddo::{ImmutableKdTree, SquaredEuclidean};
use rayon::prelude::*;

use crate::physics::dipole_likelihood::{BulkFlowFit, SigmaStar};

use super::fit::{fit_subset, fit_vectors, fittable};
use crate::physics::cosmology::Cosmology;

use super::{FlowError, FlowSample};

pub use crate::settings::FitSpace;
use crate::settings::OutlierChoice;

impl OutlierSettings {
    /// Resolved settings, checked.
    pub fn from_choice(choice: &OutlierChoice) -> Result<OutlierSettings, FlowError> {
        let c = &choice.filled();
        let s = OutlierSettings {
            threshold: c.threshold.unwrap_or_default(),
            neighbours: c.neighbours.unwrap_or_default(),
            neighbour_threshold: c.neighbour_threshold.unwrap_or_default(),
            max_speed: c.max_speed,
            eta_range: c.eta_range.unwrap_or_default(),
            space: c.quantity.unwrap_or_default(),
            sigma_star: c.sigma_star.map(SigmaStar::Fixed).unwrap_or(SigmaStar::Fit),
        };
        for (name, v) in [
            ("threshold", s.threshold),
            ("neighbour_threshold", s.neighbour_threshold),
        ] {
            if !(v.is_finite() && v > 0.0) {
                return Err(FlowError::Settings(format!(
                    "outliers: {name} must be a positive number of σ, got {v}"
                )));
            }
        }
        if let Some(m) = s.max_speed {
            if !(m.is_finite() && m > 0.0) {
                return Err(FlowError::Settings(format!(
                    "outliers: max_speed must be a positive speed, got {m}"
                )));
            }
        }
        if s.eta_range[0] >= s.eta_range[1] || s.eta_range.iter().any(|x| x.is_nan()) {
            return Err(FlowError::Settings(format!(
                "outliers: eta_range must be [low, high] with low < high, got {:?}",
                s.eta_range
            )));
        }
        if let SigmaStar::Fixed(v) = s.sigma_star {
            if !(v.is_finite() && v >= 0.0) {
                return Err(FlowError::Settings(format!(
                    "outliers: sigma_star must be non-negative, got {v}"
                )));
            }
        }
        Ok(s)
    }
}

/// Resolved outlier settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OutlierSettings {
    pub threshold: f64,
    pub neighbours: usize,
    pub neighbour_threshold: f64,
    pub max_speed: Option<f64>,
    pub eta_range: [f64; 2],
    pub space: FitSpace,
    pub sigma_star: SigmaStar,
}

/// Reasons, as bits.
pub const RESIDUAL: u8 = 1;
pub const NEIGHBOURS: u8 = 2;
pub const SPEED_LIMIT: u8 = 4;
pub const ETA_RANGE: u8 = 8;

/// The stable reason names, in bit order.
pub const REASONS: [(u8, &str); 4] = [
    (RESIDUAL, "residual"),
    (NEIGHBOURS, "neighbours"),
    (SPEED_LIMIT, "speed_limit"),
    (ETA_RANGE, "eta_range"),
];

/// Reason bits as text, comma-separated ("" for none).
pub fn reason_text(bits: u8) -> String {
    REASONS
        .iter()
        .filter(|(b, _)| bits & b != 0)
        .map(|(_, n)| *n)
        .collect::<Vec<_>>()
        .join(",")
}

/// The outcome.
#[derive(Debug, Clone)]
pub struct OutlierResult {
    /// Reason bits per row (0: not an outlier; rows that are not usable stay 0).
    pub reasons: Vec<u8>,
    /// Iterations of the residual loop.
    pub iterations: usize,
    /// The flow fitted to the objects left.
    pub flow: BulkFlowFit,
}

impl OutlierResult {
    /// Count per reason, and the number of flagged rows.
    pub fn counts(&self) -> (Vec<(&'static str, usize)>, usize) {
        let per = REASONS
            .iter()
            .map(|(b, n)| (*n, self.reasons.iter().filter(|r| *r & b != 0).count()))
            .collect();
        (per, self.reasons.iter().filter(|r| **r != 0).count())
    }
}

/// Flag outliers. Rows that are not usable are never flagged and never used.
pub fn flag_outliers(
    sample: &FlowSample,
    cosmology: &Cosmology,
    s: &OutlierSettings,
) -> Result<OutlierResult, FlowError> {
    let n = sample.len();
    let (y, e, k) = fit_vectors(sample, cosmology, s.space);
    let usable = fittable(sample, &y, &e, &k);
    let mut reasons = vec![0u8; n];
    // (c) hard limits.
    for i in 0..n {
        if !usable[i] {
            continue;
        }
        if let Some(m) = s.max_speed {
            if sample.v_pec[i].abs() > m {
                reasons[i] |= SPEED_LIMIT;
            }
        }
        if sample.eta[i] < s.eta_range[0] || sample.eta[i] > s.eta_range[1] {
            reasons[i] |= ETA_RANGE;
        }
    }
    // (a) residuals about the flow, iterated to a stable set.
    let mut flagged: Vec<bool> = vec![false; n];
    let mut iterations = 0;
    let flow = loop {
        iterations += 1;
        let keep: Vec<bool> = (0..n)
            .map(|i| usable[i] && reasons[i] & (SPEED_LIMIT | ETA_RANGE) == 0 && !flagged[i])
            .collect();
        let (fit, _) = fit_subset(sample, &y, &e, &k, &keep, s.sigma_star)?;
        let model = |i: usize| {
            let d = sample.directions[i];
            k[i] * (fit.v[0] * d[0] + fit.v[1] * d[1] + fit.v[2] * d[2])
        };
        let next: Vec<bool> = (0..n)
            .map(|i| {
                usable[i] && {
                    let sd = (e[i] * e[i] + (k[i] * fit.sigma_star).powi(2)).sqrt();
                    ((y[i] - model(i)) / sd).abs() > s.threshold
                }
            })
            .collect();
        if next == flagged || iterations >= 50 {
            flagged = next;
            break fit;
        }
        flagged = next;
    };
    for i in 0..n {
        if flagged[i] {
            reasons[i] |= RESIDUAL;
        }
    }
    // (b) neighbour consistency in velocity-equivalent units u = y/κ.
    if s.neighbours > 0 {
        let reference: Vec<usize> = (0..n).filter(|&i| usable[i] && reasons[i] == 0).collect();
        if reference.len() > s.neighbours {
            let positions: Vec<[f64; 3]> = reference
                .iter()
                .map(|&i| {
                    let r = cosmology
                        .comoving_distance(sample.z_cmb[i])
                        .unwrap_or(f64::NAN);
                    let d = sample.directions[i];
                    [d[0] * r, d[1] * r, d[2] * r]
                })
                .collect();
            let tree = ImmutableKdTree::new_from_slice(&positions)
                .map_err(|e| FlowError::Fit(format!("neighbour search: {e:?}")))?;
            let sstar = flow.sigma_star;
            let u = |i: usize| y[i] / k[i];
            let su2 = |i: usize| (e[i] / k[i]).powi(2) + sstar * sstar;
            let want = NonZero::new(s.neighbours + 1).expect("positive");
            let hits: Vec<bool> = (0..n)
                .into_par_iter()
                .map(|i| {
                    if !usable[i] {
                        return false;
                    }
                    let r = cosmology
                        .comoving_distance(sample.z_cmb[i])
                        .unwrap_or(f64::NAN);
                    let d = sample.directions[i];
                    let q = [d[0] * r, d[1] * r, d[2] * r];
                    let found = tree
                        .query(&q)
                        .nearest_n::<SquaredEuclidean<f64>>(want)
                        .execute();
                    let (mut sw, mut swu) = (0.0, 0.0);
                    let mut used = 0;
                    for item in found {
                        let j = reference[item.item as usize];
                        if j == i || used == s.neighbours {
                            continue;
                        }
                        let w = 1.0 / su2(j);
                        sw += w;
                        swu += w * u(j);
                        used += 1;
                    }
                    if used == 0 {
                        return false;
                    }
                    let mean = swu / sw;
                    ((u(i) - mean) / (su2(i) + 1.0 / sw).sqrt()).abs() > s.neighbour_threshold
                })
                .collect();
            for i in 0..n {
                if hits[i] {
                    reasons[i] |= NEIGHBOURS;
                }
            }
        }
    }
    Ok(OutlierResult {
        reasons,
        iterations,
        flow,
    })
}
