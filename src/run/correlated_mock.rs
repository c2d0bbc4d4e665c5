//! `mock --correlated`: the mock's peculiar velocities drawn from the linear ΛCDM covariance
//! of its own objects (`mock::correlated`), at a chosen fσ8.

use std::collections::HashMap;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::mock::correlated::draw_correlated;
use crate::mock::{MockCatalogue, MockSpec};
use crate::physics::cosmology::Cosmology;
use crate::physics::power::{largest_distance, RadialVelocityCorrelation, LINEAR_K_MAX};
use crate::settings::short_number;

use super::covariance::{checked_k_max, power_for};
use super::RunError;

/// The settings of a correlated mock.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct CorrelatedChoice {
    /// Amplitude of the velocity covariance (default: Planck 2018 σ8 times f = Ω_m^γ of the
    /// cosmology at z = 0).
    pub fsigma8: Option<f64>,
    /// Upper wavenumber of the covariance, h Mpc⁻¹ (default 0.2).
    pub k_max: Option<f64>,
}

/// The correlated velocity of each object, keyed by the bits of its Galactic unit vector
/// (the second pass of the generator, which adds them, draws the same directions), with
/// the words for the record.
pub struct CorrelatedVelocities {
    by_direction: HashMap<[u64; 3], f64>,
    pub description: String,
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
    let draw = draw_correlated(
        &corr,
        &positions,
        fsigma8,
        spec.seed ^ 0x636f_7272_656c_6174,
    )
    .map_err(RunError::Failed)?;
    let mut by_direction = HashMap::with_capacity(positions.len());
    for (n, v) in first_pass.n_galactic.iter().zip(&draw.velocities) {
        by_direction.insert([n[0].to_bits(), n[1].to_bits(), n[2].to_bits()], *v);
    }
    Ok(CorrelatedVelocities {
        by_direction,
        description: format!(
            "Velocities drawn from the linear ΛCDM covariance of the objects' true positions (Górski 1988 kernel) with fσ8 = {}, P(k) shape Eisenstein & Hu (1998) for h = {}, Ω_m = {}, Ω_b = {}, n_s = {}, k ≤ {} h/Mpc; Cholesky factorisation with a diagonal jitter of {:e} of the variance; the bulk flow and σ_v of the spec are added on top.",
            short_number(fsigma8),
            short_number(params.h),
            short_number(params.omega_m),
            short_number(params.omega_b),
            short_number(params.n_s),
            short_number(k_max),
            draw.jitter
        ),
    })
}
