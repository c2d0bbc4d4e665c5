//! The combined flow model: gridded and analytic parts scaled by β, an external bulk flow
//! and a velocity dispersion.

use super::analytic::AnalyticField;
use super::grid::VelocityGrid;
use super::{finite, FieldAxes, FieldError};
use crate::physics::cosmology::LengthUnit;

/// A model of the peculiar-velocity field: optional gridded and analytic parts, scaled by β,
/// plus an external bulk flow, with a dispersion σ_v about the prediction.
///
/// v_model(p) = β · (v_grid(p) + v_analytic(p)) + V_ext.
///
/// β multiplies everything from the grid and the analytic part (the analytic bulk
/// included); V_ext does not scale. With linear bias, δ_galaxies = b δ, a grid computed from
/// the galaxy density contrast with f = 1 is turned into a velocity by β = f/b (Strauss &
/// Willick 1995, Phys. Rep. 261, 271). Grid and analytic part must share axes and length
/// unit ([`FlowModel::check`]).
#[derive(Debug, Clone, PartialEq)]
pub struct FlowModel {
    pub grid: Option<VelocityGrid>,
    pub analytic: Option<AnalyticField>,
    /// Scale of the grid and analytic velocities.
    pub beta: f64,
    /// V_ext, km/s, on the model's axes; added unscaled.
    pub external: [f64; 3],
    /// Dispersion of true velocities about the model (one component, km/s); carried for
    /// the caller's error budget, not used by [`FlowModel::velocity`].
    pub sigma_v: f64,
}

impl FlowModel {
    /// Consistency: each part valid, grid and analytic parts on the same axes and unit,
    /// finite β and V_ext, σ_v ≥ 0 and finite.
    pub fn check(&self) -> Result<(), FieldError> {
        if let Some(g) = &self.grid {
            g.check()?;
        }
        if let Some(a) = &self.analytic {
            a.check()?;
        }
        if let (Some(g), Some(a)) = (&self.grid, &self.analytic) {
            if g.axes != a.axes || g.length_unit != a.length_unit {
                return Err(FieldError::Mismatch {
                    grid_axes: g.axes,
                    grid_unit: g.length_unit.label(),
                    analytic_axes: a.axes,
                    analytic_unit: a.length_unit.label(),
                });
            }
        }
        finite("beta", self.beta)?;
        for &e in &self.external {
            finite("external flow", e)?;
        }
        if !(self.sigma_v.is_finite() && self.sigma_v >= 0.0) {
            return Err(FieldError::NotFinite {
                quantity: "sigma_v (must be finite and ≥ 0)",
                value: self.sigma_v,
            });
        }
        Ok(())
    }

    /// Axes of the positions and velocities: the grid's, else the analytic part's.
    pub fn axes(&self) -> Option<FieldAxes> {
        self.grid
            .as_ref()
            .map(|g| g.axes)
            .or(self.analytic.as_ref().map(|a| a.axes))
    }

    /// Length unit of positions: the grid's, else the analytic part's.
    pub fn length_unit(&self) -> Option<LengthUnit> {
        self.grid
            .as_ref()
            .map(|g| g.length_unit)
            .or(self.analytic.as_ref().map(|a| a.length_unit))
    }

    /// Model velocity at `p`, km/s: β (v_grid + v_analytic) + V_ext. `None` when there is a
    /// grid and `p` is outside it ([`VelocityGrid::contains`]); without a grid the model is
    /// defined everywhere (just V_ext when there is no analytic part either).
    pub fn velocity(&self, p: [f64; 3]) -> Option<[f64; 3]> {
        let mut v = match &self.grid {
            Some(g) => g.velocity_at(p)?,
            None => [0.0; 3],
        };
        if let Some(a) = &self.analytic {
            let u = a.velocity_at(p);
            for c in 0..3 {
                v[c] += u[c];
            }
        }
        for (vc, ext) in v.iter_mut().zip(self.external) {
            *vc = self.beta * *vc + ext;
        }
        Some(v)
    }

    /// Line-of-sight component of [`FlowModel::velocity`] for an observer at the origin,
    /// v·p/|p|, km/s (positive = receding). `None` outside the grid or at p = 0.
    pub fn radial_velocity(&self, p: [f64; 3]) -> Option<f64> {
        let r = (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt();
        if !(r.is_finite() && r > 0.0) {
            return None;
        }
        let v = self.velocity(p)?;
        Some((v[0] * p[0] + v[1] * p[1] + v[2] * p[2]) / r)
    }
}
