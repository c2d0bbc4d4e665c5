//! The linear-theory covariance of the radial peculiar velocities of a set of objects,
//! object by object (an N × N matrix), and the correlation of the radial velocities at any
//! two points.
//!
//! Method: ⟨v_n v_m⟩ = (H0 f)²/(2π²) ∫_0^{k_max} dk P(k) f_mn(k), with f_mn Górski's (1988,
//! ApJ 332, L7) angle-averaged radial-velocity kernel, the pair window of Watkins, Feldman &
//! Hudson (2009, MNRAS 392, 743) — the same kernel as [`bulk_flow_window`](super::bulk_flow_window),
//! here integrated over k once per separation (the table of
//! [`lcdm_bulk_flow_covariance_by_separation`](super::lcdm_bulk_flow_covariance_by_separation))
//! and looked up per pair. The self term is the table at A = 0, (1/3) ∫ P dk, so that the
//! matrix is made of one consistent kernel.
//!
//! Units: positions in h⁻¹ Mpc (observer at the origin), k in h Mpc⁻¹, velocities in km/s,
//! H0 = 100 km/s per h⁻¹ Mpc.
#![allow(clippy::needless_range_loop)] // small vectors and matrices read best with indices

use std::f64::consts::PI;

use rayon::prelude::*;

use super::spectrum::LinearPower;
use super::window::SeparationTable;
use super::H0_KM_S_PER_MPC_H;

/// The upper wavenumber the `covariance` command uses unless told otherwise, h Mpc⁻¹: a
/// common-practice boundary of the scales where linear theory holds at z ≈ 0 (what lies
/// above is left to the nonlinear dispersion σ_v on the diagonal).
pub const LINEAR_K_MAX: f64 = 0.2;

/// The radial-velocity correlation ⟨v(r_a) v(r_b)⟩ of linear theory for any two points
/// inside a sphere, from a table of the k integrals by separation.
pub struct RadialVelocityCorrelation {
    table: SeparationTable,
    /// (H0 f)²/(2π²), (km/s)² per (h⁻¹ Mpc)².
    scale: f64,
    max_separation: f64,
}

impl RadialVelocityCorrelation {
    /// The correlation for `power` (at z = 0) and growth rate `growth_rate`, with the k
    /// integrals cut at `k_max` (h Mpc⁻¹), for pairs up to `max_separation` h⁻¹ Mpc apart
    /// (e.g. twice the largest distance).
    pub fn new(
        power: &LinearPower,
        growth_rate: f64,
        max_separation: f64,
        k_max: f64,
    ) -> RadialVelocityCorrelation {
        let a_max = max_separation.max(1.0) * (1.0 + 1e-9) + 1e-9;
        let h0f = H0_KM_S_PER_MPC_H * growth_rate;
        RadialVelocityCorrelation {
            table: SeparationTable::up_to(power, a_max, k_max),
            scale: h0f * h0f / (2.0 * PI * PI),
            max_separation: a_max,
        }
    }

    /// The largest separation the table covers, h⁻¹ Mpc.
    pub fn max_separation(&self) -> f64 {
        self.max_separation
    }

    /// Variance of the radial velocity at any point, (km/s)².
    pub fn variance(&self) -> f64 {
        self.scale * self.table.self_pair()
    }

    /// ⟨v_a v_b⟩ in (km/s)² for the radial velocities at `a` and `b` (h⁻¹ Mpc, non-zero),
    /// each along its own line of sight. NaN beyond [`Self::max_separation`].
    pub fn between(&self, a: [f64; 3], b: [f64; 3]) -> f64 {
        let ua = unit(a);
        let ub = unit(b);
        let d = [a[0] - b[0], a[1] - b[1], a[2] - b[2]];
        let sep2 = dot(&d, &d);
        let sep = sep2.sqrt();
        if sep > self.max_separation {
            return f64::NAN;
        }
        if sep2 == 0.0 {
            return self.variance() * dot(&ua, &ub);
        }
        let cos_a = dot(&ua, &ub);
        let pp_a2 = dot(&ua, &d) * dot(&ub, &d) / sep2;
        self.scale * self.table.pair(sep, cos_a, pp_a2)
    }
}

#[inline(always)]
fn dot(a: &[f64; 3], b: &[f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

fn unit(r: [f64; 3]) -> [f64; 3] {
    let n = dot(&r, &r).sqrt();
    [r[0] / n, r[1] / n, r[2] / n]
}

/// Power-spectrum parameters for a background cosmology: its h and Ω_m, the baryon density
/// `omega_b` (default: Planck 2018's Ω_b h² = 0.02242 held fixed at this h), `n_s` (default
/// Planck 2018) and `sigma8`; T_cmb of Planck 2018 ([`PowerParams::planck2018`]).
pub fn power_params_for(
    cosmology: &crate::physics::cosmology::CosmologyParams,
    sigma8: f64,
    omega_b: Option<f64>,
    n_s: Option<f64>,
) -> super::PowerParams {
    let base = super::PowerParams::planck2018();
    let h = cosmology.little_h();
    super::PowerParams {
        h,
        omega_m: cosmology.omega_m,
        omega_b: omega_b.unwrap_or(base.omega_b * base.h * base.h / (h * h)),
        t_cmb: base.t_cmb,
        n_s: n_s.unwrap_or(base.n_s),
        sigma8,
    }
}

/// The largest distance from the origin of `positions`.
pub fn largest_distance(positions: &[[f64; 3]]) -> f64 {
    positions
        .iter()
        .map(|r| dot(r, r).sqrt())
        .fold(0.0_f64, f64::max)
}

/// The N × N covariance (km/s)² of the radial velocities at `positions` (h⁻¹ Mpc), row-major
/// (element (i, j) at `i * N + j`), symmetric. `progress` is called with the number of rows
/// finished so far (from any thread, in no particular order of calls). Deterministic: each
/// element is computed on its own.
pub fn radial_velocity_covariance(
    correlation: &RadialVelocityCorrelation,
    positions: &[[f64; 3]],
    progress: &(dyn Fn(usize) + Sync),
) -> Vec<f64> {
    let n = positions.len();
    let done = std::sync::atomic::AtomicUsize::new(0);
    let var = correlation.variance();
    let mut c = vec![0.0; n * n];
    c.par_chunks_mut(n.max(1)).enumerate().for_each(|(i, row)| {
        for (j, cell) in row.iter_mut().enumerate().skip(i) {
            *cell = if i == j {
                var
            } else {
                correlation.between(positions[i], positions[j])
            };
        }
        let k = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
        progress(k);
    });
    // Mirror the upper triangle.
    for i in 0..n {
        for j in 0..i {
            c[i * n + j] = c[j * n + i];
        }
    }
    c
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::power::PowerParams;

    /// The diagonal is (H0 f)²/(2π²) (1/3) ∫ P dk, the 1-D velocity dispersion of linear
    /// theory (the 3-D one of `pk_integral`'s doc, divided by 3), and the matrix is symmetric.
    #[test]
    fn diagonal_is_a_third_of_the_3d_dispersion() {
        let power = LinearPower::new(PowerParams::planck2018());
        let f = 0.53;
        let corr = RadialVelocityCorrelation::new(&power, f, 400.0, 1e3);
        let expected = (100.0 * f).powi(2) / (2.0 * PI * PI) * power.pk_integral(1e-10, 1e3) / 3.0;
        assert!((corr.variance() / expected - 1.0).abs() < 1e-6);
        let pos = [[50.0, 10.0, -3.0], [-20.0, 60.0, 8.0], [5.0, 5.0, 90.0]];
        let c = radial_velocity_covariance(&corr, &pos, &|_| {});
        for i in 0..3 {
            for j in 0..3 {
                assert_eq!(c[i * 3 + j], c[j * 3 + i]);
            }
        }
    }
}
