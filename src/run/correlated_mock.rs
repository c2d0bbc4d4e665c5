//! `mock --correlated`: the mock's peculiar velocities drawn from the linear ΛCDM covariance
//! of its own objects (`mock::correlated`), at a chosen fσ8.

use std::collections::HashMap;

pub use crate::mock::correlated::CorrelatedChoice;
use crate::mock::correlated::{draw_correlated, CorrelatedMethod, CHOLESKY_MAX_OBJECTS};
use crate::mock::random_field::{draw_field, field_grid_for};
use crate::mock::{MockCatalogue, MockSpec};
use crate::physics::cosmology::Cosmology;
use crate::physics::power::{largest_distance, RadialVelocityCorrelation, LINEAR_K_MAX};
use crate::settings::short_number;

use super::covariance::{checked_k_max, power_for};
use super::RunError;

/// The correlated velocity of each object, keyed by the bits of its Galactic unit vector
/// (the second pass of the generator, which adds them, draws the same directions), with
/// the words for the record.
pub struct CorrelatedVelocities {
    by_direction: HashMap<[u64; 3], f64>,
    pub description: String,
    /// The method used.
    pub method: CorrelatedMethod,
    /// For the random field: the fraction of the covariance's one-point variance σ_v² that
    /// the draw carries.
    pub captured_fraction: Option<f64>,
}

impl CorrelatedVelocities {
    pub fn at(&self, n_gal: [f64; 3]) -> Option<f64> {
        self.by_direction
            .get(&[n_gal[0].to_bits(), n_gal[1].to_bits(), n_gal[2].to_bits()])
            .copied()
    }
}

/// Draw the correlated velocities at the true positions D_C(z_cos) n̂ of `first_pass` (a mock
/// of `spec` made without them). The seed of the draw is the spec's, on a stream of its own.
pub fn correlated_velocities(
    spec: &MockSpec,
    first_pass: &MockCatalogue,
    cosmology: &Cosmology,
    choice: &CorrelatedChoice,
) -> Result<CorrelatedVelocities, RunError> {
    let k_max = checked_k_max(choice.k_max.or(Some(LINEAR_K_MAX)))?;
    let h = cosmology.params().little_h();
    let positions: Vec<[f64; 3]> = first_pass
        .n_galactic
        .iter()
        .zip(&first_pass.true_d_c)
        .map(|(n, d)| [n[0] * d * h, n[1] * d * h, n[2] * d * h])
        .collect();
    let (power, params) = power_for(cosmology, 1.0, None, None)?;
    let fsigma8 = choice.fsigma8.unwrap_or_else(|| {
        crate::physics::power::PowerParams::planck2018().sigma8
            * crate::physics::power::growth_rate_of(cosmology.params(), 0.0)
    });
    let corr =
        RadialVelocityCorrelation::new(&power, 1.0, 2.0 * largest_distance(&positions), k_max);
    let seed = spec.seed ^ 0x636f_7272_656c_6174;
    let method = choice
        .method
        .unwrap_or_else(|| CorrelatedMethod::for_count(positions.len()));
    let model_words = format!(
        "fσ8 = {}, P(k) shape Eisenstein & Hu (1998) for h = {}, Ω_m = {}, Ω_b = {}, n_s = {}, k ≤ {} h/Mpc",
        short_number(fsigma8),
        short_number(params.h),
        short_number(params.omega_m),
        short_number(params.omega_b),
        short_number(params.n_s),
        short_number(k_max),
    );
    let (velocities, description, captured_fraction) = match method {
        CorrelatedMethod::Cholesky => {
            if positions.len() > CHOLESKY_MAX_OBJECTS {
                return Err(RunError::Failed(format!(
                    "--correlated-method cholesky takes at most {CHOLESKY_MAX_OBJECTS} objects, the mock has {}; use --correlated-method field",
                    positions.len()
                )));
            }
            let draw =
                draw_correlated(&corr, &positions, fsigma8, seed).map_err(RunError::Failed)?;
            let words = format!(
                "Velocities drawn from the linear ΛCDM covariance of the objects' true positions (Górski 1988 kernel) with {model_words}; Cholesky factorisation with a diagonal jitter of {:e} of the variance; the bulk flow and σ_v of the spec are added on top.",
                draw.jitter
            );
            (draw.velocities, words, None)
        }
        CorrelatedMethod::Field => {
            let grid = field_grid_for(largest_distance(&positions), k_max);
            let draw = draw_field(&power, &positions, fsigma8, k_max, grid, seed)
                .map_err(RunError::Failed)?;
            let reference = fsigma8 * fsigma8 * corr.variance();
            let fraction = if reference > 0.0 {
                draw.captured_variance / reference
            } else {
                1.0
            };
            let words = format!(
                "Velocities drawn as a Gaussian random field of linear ΛCDM (v(k) = i H0 fσ8 δ(k) k/k²) on a periodic grid of {}³ cells of {} h⁻¹ Mpc (box {} h⁻¹ Mpc, observer at a node; {} modes, Nyquist {} h/Mpc), read off at the objects' true positions by trilinear interpolation, with {model_words}; the field carries {:.1} % of the covariance's one-point σ_v² (modes longer than the box are absent and the interpolation smooths), so the velocities are less correlated on the largest scales than the covariance says; the bulk flow and σ_v of the spec are added on top.",
                draw.grid.cells,
                short_number(draw.grid.spacing),
                short_number(draw.grid.side()),
                draw.modes,
                short_number(draw.grid.nyquist()),
                100.0 * fraction
            );
            (draw.velocities, words, Some(fraction))
        }
    };
    let mut by_direction = HashMap::with_capacity(positions.len());
    for (n, v) in first_pass.n_galactic.iter().zip(&velocities) {
        by_direction.insert([n[0].to_bits(), n[1].to_bits(), n[2].to_bits()], *v);
    }
    Ok(CorrelatedVelocities {
        by_direction,
        description,
        method,
        captured_fraction,
    })
}
