//! Analytic velocity fields: a uniform bulk flow plus spherical linear infall onto named
//! centres, and their sampling onto a grid.

use serde::{Deserialize, Serialize};

use super::grid::VelocityGrid;
use super::{cell_count, finite, positive, FieldAxes, FieldError};
use crate::physics::cosmology::LengthUnit;

/// A spherically symmetric overdensity that galaxies fall towards in linear theory.
///
/// Mean overdensity inside radius r (the profile adopted here):
///
/// Δ(<r) = δ0 / (1 + (r/r_s)²),
///
/// flat (Δ → δ0) in the core and falling as r⁻² outside. The local overdensity that
/// matches it, δ(r) = (3r²)⁻¹ d(r³Δ)/dr, is δ0 (1 + x²/3)/(1 + x²)² with x = r/r_s; the
/// excess mass inside r grows ∝ r at large r. Linear theory wants |Δ| ≪ 1.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InfallCentre {
    /// A label for messages and outputs (e.g. "knot").
    pub name: String,
    /// Centre, in the model's length unit and axes.
    pub position: [f64; 3],
    /// Mean overdensity in the core, Δ(<0).
    pub delta0: f64,
    /// Core radius r_s, in the model's length unit.
    pub r_scale: f64,
}

impl InfallCentre {
    /// Δ(<r), the mean overdensity inside radius r.
    pub fn mean_overdensity(&self, r: f64) -> f64 {
        let x = r / self.r_scale;
        self.delta0 / (1.0 + x * x)
    }

    /// δ(r), the local overdensity at radius r implied by [`InfallCentre::mean_overdensity`].
    pub fn local_overdensity(&self, r: f64) -> f64 {
        let x2 = (r / self.r_scale).powi(2);
        self.delta0 * (1.0 + x2 / 3.0) / (1.0 + x2).powi(2)
    }

    /// Linear-theory infall velocity at `p`, km/s:
    ///
    /// **v = −(1/3) H0 f Δ(<r) r r̂**, r = |p − centre|, r̂ the unit vector from the centre
    /// to p (towards the centre for Δ > 0).
    ///
    /// Source: Peebles (1976), ApJ 205, 318, "The peculiar velocity field in the Local
    /// Supercluster"; Peebles (1980), *The Large-Scale Structure of the Universe*, §14. It
    /// is the integral form of ∇·v = −H0 f δ for a spherical perturbation (Gauss's theorem
    /// over the sphere of radius r). With the profile above, r r̂ = p − centre and
    /// v = −(1/3) H0 f δ0 (p − centre)/(1 + r²/r_s²): smooth everywhere and zero at the
    /// centre.
    pub fn velocity_at(&self, p: [f64; 3], h0_km_s_per_length: f64, growth_rate: f64) -> [f64; 3] {
        let d = [
            p[0] - self.position[0],
            p[1] - self.position[1],
            p[2] - self.position[2],
        ];
        let r = (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt();
        let s = -h0_km_s_per_length * growth_rate * self.mean_overdensity(r) / 3.0;
        [s * d[0], s * d[1], s * d[2]]
    }

    fn check(&self) -> Result<(), FieldError> {
        for &x in &self.position {
            finite("infall centre position", x)?;
        }
        finite("infall centre delta0", self.delta0)?;
        positive("infall centre r_scale", self.r_scale)
    }
}

/// An analytic velocity field: a uniform bulk flow plus linear infall onto any number of
/// centres, v(p) = bulk + Σ_centres v_c(p).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AnalyticField {
    /// Uniform flow, km/s, on `axes`.
    pub bulk: [f64; 3],
    pub centres: Vec<InfallCentre>,
    /// Linear growth rate f = d ln D / d ln a at z = 0 (≈ Ω_m^0.55 in ΛCDM).
    pub growth_rate: f64,
    /// H0 in km/s per `length_unit` ([`hubble_per_length`](super::hubble_per_length)).
    pub h0_km_s_per_length: f64,
    pub axes: FieldAxes,
    pub length_unit: LengthUnit,
}

impl AnalyticField {
    /// Finite bulk and growth rate, positive H0, well-formed centres.
    pub fn check(&self) -> Result<(), FieldError> {
        for &b in &self.bulk {
            finite("bulk flow", b)?;
        }
        finite("growth rate", self.growth_rate)?;
        positive("H0 per length unit", self.h0_km_s_per_length)?;
        self.centres.iter().try_for_each(InfallCentre::check)
    }

    /// Velocity at `p` (defined everywhere), km/s.
    pub fn velocity_at(&self, p: [f64; 3]) -> [f64; 3] {
        let mut v = self.bulk;
        for c in &self.centres {
            let u = c.velocity_at(p, self.h0_km_s_per_length, self.growth_rate);
            for a in 0..3 {
                v[a] += u[a];
            }
        }
        v
    }

    /// The model sampled at the cell centres of a grid with the given geometry, on the
    /// model's axes and length unit.
    pub fn sample(
        &self,
        origin: [f64; 3],
        spacing: f64,
        shape: [usize; 3],
    ) -> Result<VelocityGrid, FieldError> {
        self.check()?;
        let n = cell_count(shape)?;
        let mut grid = VelocityGrid {
            origin,
            spacing,
            shape,
            axes: self.axes,
            length_unit: self.length_unit,
            v: [vec![0.0; n], vec![0.0; n], vec![0.0; n]],
        };
        grid.check()?;
        for idx in 0..n {
            let [i, j, k] = grid.cell_of(idx);
            let v = self.velocity_at(grid.cell_centre(i, j, k));
            for (c, comp) in grid.v.iter_mut().enumerate() {
                comp[idx] = v[c];
            }
        }
        Ok(grid)
    }
}
#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn field_analytic_sample_matches_model_at_centres() {
        let model = AnalyticField {
            bulk: [10.0, 0.0, -5.0],
            centres: vec![InfallCentre {
                name: "c".into(),
                position: [0.0; 3],
                delta0: 1.0,
                r_scale: 5.0,
            }],
            growth_rate: 0.5,
            h0_km_s_per_length: 100.0,
            axes: FieldAxes::Galactic,
            length_unit: LengthUnit::MpcOverH,
        };
        let g = model.sample([-4.0; 3], 2.0, [5, 5, 5]).unwrap();
        assert_eq!(g.axes, FieldAxes::Galactic);
        let p = g.cell_centre(4, 1, 3);
        assert_eq!(g.velocity_at(p).unwrap(), model.velocity_at(p));
        let mut bad = model.clone();
        bad.centres[0].r_scale = 0.0;
        assert!(bad.sample([0.0; 3], 1.0, [2, 2, 2]).is_err());
    }
}
