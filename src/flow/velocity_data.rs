//! The objects of a sample as the velocity-covariance methods see them: redshift-space
//! positions, the data in a chosen quantity (velocity, μ or η), its error, and the
//! derivative of the quantity by the radial peculiar velocity at v = 0. Also the averaging
//! of objects in cubic cells. Pure: no files.
#![allow(clippy::needless_range_loop)] // small vectors and matrices read best with indices

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::constants::C_KM_S;
use crate::physics::cosmology::Cosmology;
use crate::physics::dipole_likelihood::eta_per_velocity;
use crate::physics::estimators::DlConvention;

use super::FlowSample;

/// The quantity a covariance or a likelihood is written in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum SampleQuantity {
    /// Radial peculiar velocity, km/s.
    Velocity,
    /// Distance modulus, mag.
    Mu,
    /// Log-distance ratio η = log10(D_C(z_cmb)/D_C(z_cos)).
    #[default]
    Eta,
}

impl SampleQuantity {
    pub fn name(self) -> &'static str {
        match self {
            SampleQuantity::Velocity => "velocity",
            SampleQuantity::Mu => "mu",
            SampleQuantity::Eta => "eta",
        }
    }

    /// The unit of the quantity squared, as a FITS unit string (FITS 4.0 §4.3), for BUNIT.
    pub fn squared_unit(self) -> &'static str {
        match self {
            SampleQuantity::Velocity => "km2 s-2",
            SampleQuantity::Mu => "mag2",
            SampleQuantity::Eta => "",
        }
    }
}

/// ∂μ/∂v at v = 0 (mag per km/s) for an object at CMB-frame redshift `z`, in the
/// luminosity-distance convention `convention`: with 1 + z_cos = (1 + z)/(1 + z_pec) and
/// dz_pec/dv = 1/c, dz_cos/dv = −(1 + z)/c, and μ = 5 log10 D_L + 25 with
/// - observed: D_L = (1 + z_helio) D_M(z_cos): ∂ln D_L/∂v = (D_M'/D_M) dz_cos/dv;
/// - cosmological: D_L = (1 + z_cos) D_M(z_cos): adds −1/c;
/// - full: D_L = (1 + z_helio)(1 + z_cmb) D_M(z_cos)/(1 + z_cos): adds +1/c;
///
/// D_M' = dD_M/dz = (dD_M/dD_C) D_H/E(z) (Hogg 1999, eqs. 15–16). Differentiation of the
/// conventions' definitions (`physics::estimators::DlConvention`).
pub fn mu_per_velocity(cosmology: &Cosmology, z: f64, convention: DlConvention) -> Option<f64> {
    let dc = cosmology.comoving_distance(z).ok()?;
    let dm = cosmology.transverse_from_comoving(dc);
    let dm_dz = cosmology.transverse_derivative(dc) * cosmology.comoving_distance_derivative(z);
    let dz_cos_dv = -(1.0 + z) / C_KM_S;
    let extra = match convention {
        DlConvention::Observed => 0.0,
        DlConvention::Cosmological => -1.0 / C_KM_S,
        DlConvention::Full => 1.0 / C_KM_S,
    };
    let dln = dm_dz / dm * dz_cos_dv + extra;
    Some(5.0 / std::f64::consts::LN_10 * dln)
}

/// The usable objects of a sample in one quantity.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct VelocityObjects {
    /// Input row (0-based) of each object.
    pub rows: Vec<usize>,
    /// Redshift-space positions D_C(z_cmb) r̂ in h⁻¹ Mpc, Galactic axes.
    pub positions: Vec<[f64; 3]>,
    /// The data (NaN for μ, which a flowsift output does not carry as the fitted quantity).
    pub values: Vec<f64>,
    /// Its 1σ errors (NaN where absent).
    pub errors: Vec<f64>,
    /// ∂(quantity)/∂v at v = 0, per km/s.
    pub per_velocity: Vec<f64>,
    /// κ_η = ∂η/∂v at v = 0 (the zero-point shift of velocities is −1/(5 κ_η)).
    pub eta_per_velocity: Vec<f64>,
}

impl VelocityObjects {
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// t_i, the shift of the data per magnitude of zero-point offset of the distance moduli
    /// (D → D 10^{δ/5}): −1/5 for η, −1/(5 κ_η) for velocities, 1 for μ.
    pub fn zero_point_shift(&self, quantity: SampleQuantity) -> Vec<f64> {
        match quantity {
            SampleQuantity::Eta => vec![-0.2; self.len()],
            SampleQuantity::Velocity => self.eta_per_velocity.iter().map(|k| -0.2 / k).collect(),
            SampleQuantity::Mu => vec![1.0; self.len()],
        }
    }
}

/// The objects of `sample` that are usable (status ok, not an outlier when those are left
/// out, finite position) with a finite derivative; with `need_data`, also a finite value and
/// a positive error. `little_h` turns Mpc into h⁻¹ Mpc.
pub fn velocity_objects(
    sample: &FlowSample,
    cosmology: &Cosmology,
    quantity: SampleQuantity,
    convention: DlConvention,
    need_data: bool,
) -> VelocityObjects {
    let h = cosmology.params().little_h();
    let mut out = VelocityObjects::default();
    for i in 0..sample.len() {
        if !sample.usable[i] {
            continue;
        }
        let z = sample.z_cmb[i];
        let Ok(dc) = cosmology.comoving_distance(z) else {
            continue;
        };
        let Some(k_eta) = eta_per_velocity(cosmology, z) else {
            continue;
        };
        let (value, error, deriv) = match quantity {
            SampleQuantity::Velocity => (sample.v_pec[i], sample.v_pec_err[i], Some(1.0)),
            SampleQuantity::Eta => (sample.eta[i], sample.eta_err[i], Some(k_eta)),
            SampleQuantity::Mu => (
                f64::NAN,
                f64::NAN,
                mu_per_velocity(cosmology, z, convention),
            ),
        };
        let Some(deriv) = deriv.filter(|d| d.is_finite()) else {
            continue;
        };
        if !(dc.is_finite() && dc > 0.0) {
            continue;
        }
        if need_data && !(value.is_finite() && error.is_finite() && error > 0.0) {
            continue;
        }
        let d = sample.directions[i];
        let r = dc * h;
        out.rows.push(i);
        out.positions.push([d[0] * r, d[1] * r, d[2] * r]);
        out.values.push(value);
        out.errors.push(error);
        out.per_velocity.push(deriv);
        out.eta_per_velocity.push(k_eta);
    }
    out
}

/// Objects averaged in cubic cells.
#[derive(Debug, Clone, PartialEq)]
pub struct CellAverages {
    /// Error-weighted mean position of each cell's members, h⁻¹ Mpc.
    pub positions: Vec<[f64; 3]>,
    /// Error-weighted mean of the data, Σ w d / Σ w, w = 1/σ².
    pub values: Vec<f64>,
    /// Its propagated error, (Σ w)^(−½).
    pub errors: Vec<f64>,
    /// Σ w κ / Σ w: the mean responds to a common velocity v as κ̄ v.
    pub per_velocity: Vec<f64>,
    /// (Σ w² κ²)^½ / Σ w: the mean's response to independent velocities of dispersion σ_v
    /// is this times σ_v.
    pub dispersion_per_velocity: Vec<f64>,
    /// Σ w t / Σ w, the zero-point shift of the mean.
    pub zero_point_shift: Vec<f64>,
    /// The members (indices into the objects) of each cell.
    pub members: Vec<Vec<usize>>,
}

/// Average `objects` in cubic cells of side `side` (h⁻¹ Mpc) aligned on the origin, with
/// inverse-variance weights. Every object lands in exactly one cell; cells are ordered by
/// their first member. The velocity of a cell is taken at its mean position: the average
/// over the cell's volume of the velocity correlation is neglected (small when `side` is
/// small against the scales of the signal).
pub fn average_in_cells(
    objects: &VelocityObjects,
    zero_point_shift: &[f64],
    side: f64,
) -> CellAverages {
    use std::collections::BTreeMap;
    let mut order: Vec<[i64; 3]> = Vec::new();
    let mut index: BTreeMap<[i64; 3], usize> = BTreeMap::new();
    let mut members: Vec<Vec<usize>> = Vec::new();
    for (i, p) in objects.positions.iter().enumerate() {
        let key = [
            (p[0] / side).floor() as i64,
            (p[1] / side).floor() as i64,
            (p[2] / side).floor() as i64,
        ];
        let c = *index.entry(key).or_insert_with(|| {
            order.push(key);
            members.push(Vec::new());
            members.len() - 1
        });
        members[c].push(i);
    }
    let mut out = CellAverages {
        positions: Vec::with_capacity(members.len()),
        values: Vec::with_capacity(members.len()),
        errors: Vec::with_capacity(members.len()),
        per_velocity: Vec::with_capacity(members.len()),
        dispersion_per_velocity: Vec::with_capacity(members.len()),
        zero_point_shift: Vec::with_capacity(members.len()),
        members: Vec::new(),
    };
    for m in &members {
        let (mut sw, mut sw2k2) = (0.0, 0.0);
        let (mut p, mut d, mut k, mut t) = ([0.0; 3], 0.0, 0.0, 0.0);
        for &i in m {
            let w = 1.0 / objects.errors[i].powi(2);
            sw += w;
            sw2k2 += (w * objects.per_velocity[i]).powi(2);
            for a in 0..3 {
                p[a] += w * objects.positions[i][a];
            }
            d += w * objects.values[i];
            k += w * objects.per_velocity[i];
            t += w * zero_point_shift[i];
        }
        out.positions.push([p[0] / sw, p[1] / sw, p[2] / sw]);
        out.values.push(d / sw);
        out.errors.push(1.0 / sw.sqrt());
        out.per_velocity.push(k / sw);
        out.dispersion_per_velocity.push(sw2k2.sqrt() / sw);
        out.zero_point_shift.push(t / sw);
    }
    out.members = members;
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::cosmology::CosmologyParams;

    /// ∂μ/∂v by the derivative of the conventions' own formulas, checked by a central
    /// difference of μ(z_cos) at fixed observed redshift (flat ΛCDM, H0 = 70, Ω_m = 0.3,
    /// a common-practice choice).
    #[test]
    fn mu_derivative_matches_a_finite_difference() {
        let cosmo = Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3)).unwrap();
        let z = 0.05;
        let dv = 1.0;
        for conv in [
            DlConvention::Observed,
            DlConvention::Cosmological,
            DlConvention::Full,
        ] {
            let mu_of = |v: f64| {
                let zp = ((1.0 + v / C_KM_S) / (1.0 - v / C_KM_S)).sqrt() - 1.0;
                let zc = (1.0 + z) / (1.0 + zp) - 1.0;
                let dm = cosmo.transverse_comoving_distance(zc).unwrap();
                let dl = match conv {
                    DlConvention::Observed => (1.0 + z) * dm,
                    DlConvention::Cosmological => (1.0 + zc) * dm,
                    DlConvention::Full => (1.0 + z) * (1.0 + z) * dm / (1.0 + zc),
                };
                5.0 * dl.log10() + 25.0
            };
            let fd = (mu_of(dv) - mu_of(-dv)) / (2.0 * dv);
            let ours = mu_per_velocity(&cosmo, z, conv).unwrap();
            assert!((ours / fd - 1.0).abs() < 1e-5, "{conv:?}: {ours} vs {fd}");
        }
    }

    /// Two objects in one cell average with inverse-variance weights.
    #[test]
    fn cells_average_with_inverse_variance_weights() {
        let objs = VelocityObjects {
            rows: vec![0, 1, 2],
            positions: vec![[1.0, 1.0, 1.0], [3.0, 1.0, 1.0], [50.0, 0.0, 0.0]],
            values: vec![1.0, 4.0, 2.0],
            errors: vec![1.0, 2.0, 1.0],
            per_velocity: vec![1.0, 1.0, 1.0],
            eta_per_velocity: vec![1.0, 1.0, 1.0],
        };
        let c = average_in_cells(&objs, &[0.0; 3], 10.0);
        assert_eq!(c.members, vec![vec![0, 1], vec![2]]);
        // w = 1, 1/4: mean (1 + 1) / 1.25 = 1.6; error 1/√1.25.
        assert!((c.values[0] - 1.6).abs() < 1e-12);
        assert!((c.errors[0] - 1.25f64.powf(-0.5)).abs() < 1e-12);
        assert!((c.positions[0][0] - (1.0 + 0.75) / 1.25).abs() < 1e-12);
    }
}
