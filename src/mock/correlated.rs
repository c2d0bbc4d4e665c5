//! Radial peculiar velocities drawn from the linear-theory ΛCDM covariance itself, so that a
//! growth-rate fit can be checked on mocks with a known fσ8.
//!
//! v = L g, with L the Cholesky factor of C = (fσ8)² C̃ (C̃ the radial-velocity covariance
//! of the objects for fσ8 = 1, [`radial_velocity_covariance`]) and g standard normal
//! draws. A covariance cut at k_max is nearly singular (the velocity field is smooth on the
//! scale of close pairs), so a jitter ε·C̃_00 is added to the diagonal, starting at 10⁻¹⁰ and
//! raised tenfold until the factorisation succeeds (at most 10⁻⁴: an independent scatter
//! of 1 % of the rms velocity); the jitter used is reported. Pure and seeded: the draws come
//! from `ChaCha8Rng::seed_from_u64(seed)` in object order.

use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::power::{radial_velocity_covariance, RadialVelocityCorrelation};

/// The most objects drawn by Cholesky factorisation (N² doubles: 200 MB at 5000).
pub const CHOLESKY_MAX_OBJECTS: usize = 5000;

/// How correlated velocities are drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum CorrelatedMethod {
    /// Cholesky factorisation of the objects' covariance ([`draw_correlated`]): exact, for at
    /// most [`CHOLESKY_MAX_OBJECTS`] objects.
    Cholesky,
    /// A Gaussian random field on a periodic grid read off at the objects
    /// ([`super::random_field::draw_field`]): any number of objects, missing the modes longer
    /// than the box and smoothed by the grid.
    Field,
}

impl CorrelatedMethod {
    /// Cholesky up to [`CHOLESKY_MAX_OBJECTS`] objects, the field above.
    pub fn for_count(n: usize) -> CorrelatedMethod {
        if n <= CHOLESKY_MAX_OBJECTS {
            CorrelatedMethod::Cholesky
        } else {
            CorrelatedMethod::Field
        }
    }

    /// The word used on the command line and in the record.
    pub fn name(self) -> &'static str {
        match self {
            CorrelatedMethod::Cholesky => "cholesky",
            CorrelatedMethod::Field => "field",
        }
    }
}

/// The settings of a correlated mock, as asked (the record holds them with the method
/// resolved).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct CorrelatedChoice {
    /// Amplitude of the velocity covariance (default: Planck 2018 σ8 times f = Ω_m^γ of the
    /// cosmology at z = 0).
    pub fsigma8: Option<f64>,
    /// Upper wavenumber of the covariance, h Mpc⁻¹ (default 0.2).
    pub k_max: Option<f64>,
    /// How the velocities are drawn (default: [`CorrelatedMethod::for_count`]).
    pub method: Option<CorrelatedMethod>,
}

/// The draw and how it was made.
#[derive(Debug, Clone, PartialEq)]
pub struct CorrelatedDraw {
    /// Radial velocity of each object, km/s.
    pub velocities: Vec<f64>,
    /// Jitter added to the diagonal, as a fraction of the variance.
    pub jitter: f64,
}

/// Draw radial velocities at `positions` (h⁻¹ Mpc) with covariance (fσ8)² C̃, where
/// `unit_correlation` is the correlation for fσ8 = 1 (σ8 = 1 and f = 1).
pub fn draw_correlated(
    unit_correlation: &RadialVelocityCorrelation,
    positions: &[[f64; 3]],
    fsigma8: f64,
    seed: u64,
) -> Result<CorrelatedDraw, String> {
    let n = positions.len();
    if n > CHOLESKY_MAX_OBJECTS {
        return Err(format!(
            "{n} objects: correlated velocities are drawn by Cholesky factorisation for at most {CHOLESKY_MAX_OBJECTS} objects (the random-field method takes more)"
        ));
    }
    if !(fsigma8.is_finite() && fsigma8 >= 0.0) {
        return Err(format!("fσ8 must be a non-negative number, got {fsigma8}"));
    }
    let c = radial_velocity_covariance(unit_correlation, positions, &|_| {});
    let base = DMatrix::from_row_slice(n, n, &c);
    let var = unit_correlation.variance();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let g = DVector::from_fn(n, |_, _| StandardNormal.sample(&mut rng));
    let mut jitter = 1e-10;
    loop {
        let mut m = base.clone();
        for i in 0..n {
            m[(i, i)] += jitter * var;
        }
        if let Some(ch) = m.cholesky() {
            let v = ch.l() * &g * fsigma8;
            return Ok(CorrelatedDraw {
                velocities: v.iter().copied().collect(),
                jitter,
            });
        }
        jitter *= 10.0;
        if jitter > 1e-4 {
            return Err(
                "the velocity covariance could not be factorised even with a jitter of 10⁻⁴ of its variance on the diagonal".into(),
            );
        }
    }
}
