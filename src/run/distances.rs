//! `distances`: FLRW distances at given redshifts, in the run's length unit.

use crate::physics::cosmology::Distances;
use crate::plan::Shared;

use super::cosmology_reaching;

/// The distances at each redshift (D_C, D_M, D_L, D_A scaled to the length unit; μ from D_L
/// in Mpc), or the first redshift that has none.
pub fn distance_table(zs: &[f64], shared: &Shared) -> Result<Vec<Distances>, super::RunError> {
    for &z in zs {
        if !z.is_finite() {
            return Err(format!("--z: {z} is not a finite redshift").into());
        }
        if z <= -1.0 {
            return Err(
                format!("--z: redshift {z} is not above -1 (1 + z must be positive)").into(),
            );
        }
        if z < 0.0 {
            return Err(format!(
                "--z: negative redshift {z} has no distance in an expanding model"
            )
            .into());
        }
    }
    let params = shared.cosmology.params;
    let z_max = zs.iter().cloned().fold(0.0, f64::max);
    let cosmology = cosmology_reaching(params, z_max)?;
    let k = shared
        .config
        .conventions
        .length_unit
        .unwrap_or_default()
        .from_mpc_factor(&params);
    zs.iter()
        .map(|&z| {
            cosmology
                .distances(z)
                .map(|d| Distances {
                    d_c: d.d_c * k,
                    d_m: d.d_m * k,
                    d_l: d.d_l * k,
                    d_a: d.d_a * k,
                    ..d
                })
                .map_err(|e| format!("z = {z}: {e}").into())
        })
        .collect()
}

/// The rows as `flowsift distances --json` prints them: one object per redshift.
pub fn distances_json(rows: &[Distances]) -> serde_json::Value {
    serde_json::Value::Array(
        rows.iter()
            .map(|d| {
                serde_json::json!({"z": d.z, "d_c": d.d_c, "d_m": d.d_m, "d_l": d.d_l, "d_a": d.d_a, "mu": d.mu})
            })
            .collect(),
    )
}
