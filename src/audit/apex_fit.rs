//! The apex (speed and Galactic direction) that best turns the catalogue's heliocentric
//! redshifts into its frame-changed column, by linear least squares with nalgebra.
//!
//! Exact boost: (1 + z_⊙)/(1 + z_F) = γ(1 − β·n̂) (see `physics::restframe`), so
//! y = 1 − (1 + z_⊙)/[γ(1 + z_F)] = β·n̂ is linear in β; γ is taken from the previous
//! iterate (two passes converge: γ − 1 ≈ 8×10⁻⁷). Additive: c(z_F − z_⊙) = v·n̂ exactly.
//! Rows more than five robust standard deviations from the first fit are left out of the
//! second, so that a few hand-altered rows do not pull the apex. Errors: the covariance
//! s²(XᵀX)⁻¹ with s² the residual variance, carried to speed, l and b at first order.

use nalgebra::{Matrix3, Vector3};
use schemars::JsonSchema;
use serde::Serialize;

use crate::physics::constants::{C_KM_S, DEG};
use crate::physics::restframe::BoostMethod;
use crate::physics::sky::{Direction, Galactic};

/// A fitted apex with first-order errors.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, JsonSchema)]
pub struct FittedApex {
    pub speed_km_s: f64,
    pub speed_err_km_s: f64,
    pub l_deg: f64,
    pub l_err_deg: f64,
    pub b_deg: f64,
    pub b_err_deg: f64,
    /// Rows the final fit used.
    pub n_used: usize,
}

/// Robust standard deviation of residuals about zero: 1.4826 × median |r|.
pub(crate) fn robust_scale(r: &[f64]) -> f64 {
    let mut a: Vec<f64> = r
        .iter()
        .filter(|x| x.is_finite())
        .map(|x| x.abs())
        .collect();
    if a.is_empty() {
        return f64::NAN;
    }
    let m = a.len() / 2;
    a.select_nth_unstable_by(m, f64::total_cmp);
    1.4826 * a[m]
}

/// Fit the apex of `method` to `z_frame` (redshifts, not cz) given `z_helio` and the rows'
/// directions; `floor` is the redshift resolution below which residuals are not clipped.
/// `None` when fewer than four rows are usable or the directions do not span the sky.
pub fn fit_apex(
    directions: &[Option<Direction<Galactic>>],
    z_helio: &[f64],
    z_frame: &[f64],
    method: BoostMethod,
    floor: f64,
) -> Option<FittedApex> {
    let rows: Vec<([f64; 3], f64, f64)> = directions
        .iter()
        .zip(z_helio.iter().zip(z_frame))
        .filter_map(|(d, (zh, zf))| {
            let d = d.as_ref()?;
            (zh.is_finite() && zf.is_finite() && *zh > -1.0 && *zf > -1.0)
                .then(|| (d.xyz(), *zh, *zf))
        })
        .collect();
    let target = |gamma: f64, zh: f64, zf: f64| match method {
        BoostMethod::Exact => 1.0 - (1.0 + zh) / (gamma * (1.0 + zf)),
        BoostMethod::LegacyAdditive => zf - zh,
    };
    let mut keep = vec![true; rows.len()];
    let mut gamma = 1.0;
    let mut result = None;
    for pass in 0..3 {
        let mut xtx = Matrix3::<f64>::zeros();
        let mut xty = Vector3::<f64>::zeros();
        let mut n = 0usize;
        for (k, (x, zh, zf)) in rows.iter().enumerate() {
            if !keep[k] {
                continue;
            }
            let v = Vector3::new(x[0], x[1], x[2]);
            xtx += v * v.transpose();
            xty += v * target(gamma, *zh, *zf);
            n += 1;
        }
        if n < 4 {
            return None;
        }
        let inv = xtx.try_inverse()?;
        let beta = inv * xty;
        if beta.norm() >= 1.0 {
            return None;
        }
        if method == BoostMethod::Exact {
            gamma = 1.0 / (1.0 - beta.norm_squared()).sqrt();
        }
        let resid: Vec<f64> = rows
            .iter()
            .map(|(x, zh, zf)| {
                target(gamma, *zh, *zf) - (beta.x * x[0] + beta.y * x[1] + beta.z * x[2])
            })
            .collect();
        let used: Vec<f64> = resid
            .iter()
            .zip(&keep)
            .filter(|(_, k)| **k)
            .map(|(r, _)| *r)
            .collect();
        let s2 = used.iter().map(|r| r * r).sum::<f64>() / (n.saturating_sub(3).max(1)) as f64;
        result = Some((beta, inv * s2, n));
        if pass < 2 {
            let cut = (5.0 * robust_scale(&used)).max(floor);
            keep = resid.iter().map(|r| r.abs() <= cut).collect();
        }
    }
    let (beta, cov, n) = result?;
    let v = beta * C_KM_S;
    let cov = cov * (C_KM_S * C_KM_S);
    let speed = v.norm();
    if speed == 0.0 {
        return None;
    }
    let rho2 = v.x * v.x + v.y * v.y;
    let rho = rho2.sqrt();
    // Jacobians of |v|, l = atan2(y, x), b = asin(z/|v|).
    let j_speed = v / speed;
    let j_l = Vector3::new(-v.y / rho2, v.x / rho2, 0.0);
    let j_b = Vector3::new(
        -v.x * v.z / (speed * speed * rho),
        -v.y * v.z / (speed * speed * rho),
        rho / (speed * speed),
    );
    let var = |j: &Vector3<f64>| (j.transpose() * cov * j)[(0, 0)].max(0.0).sqrt();
    let (l, b) = Direction::<Galactic>::from_cartesian(v.x, v.y, v.z)
        .ok()?
        .lon_lat_deg();
    Some(FittedApex {
        speed_km_s: speed,
        speed_err_km_s: var(&j_speed),
        l_deg: l,
        l_err_deg: var(&j_l) / DEG,
        b_deg: b,
        b_err_deg: var(&j_b) / DEG,
        n_used: n,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::redshift::{Cmb, Heliocentric, Redshift};
    use crate::physics::restframe::{cmb_dipoles, legacy_additive, Boost};

    /// The fit returns the apex that made the column, for both boosts, despite two rows
    /// altered by hand.
    #[test]
    fn recovers_the_apex_that_made_the_column() {
        let apex = &cmb_dipoles()[0];
        let boost = Boost::<Cmb>::new(apex).unwrap();
        let mut dirs = vec![];
        let mut zh = vec![];
        for k in 0..200 {
            let l = (k as f64 * 137.5) % 360.0;
            let b = -80.0 + (k as f64 * 0.8) % 160.0;
            dirs.push(Some(Direction::<Galactic>::from_lon_lat_deg(l, b).unwrap()));
            zh.push(0.005 + 0.0004 * k as f64);
        }
        for method in [BoostMethod::Exact, BoostMethod::LegacyAdditive] {
            let mut zf: Vec<f64> = dirs
                .iter()
                .zip(&zh)
                .map(|(d, z)| {
                    let z = Redshift::<Heliocentric>::new(*z).unwrap();
                    let d = d.as_ref().unwrap();
                    match method {
                        BoostMethod::Exact => boost.from_heliocentric(z, d).value(),
                        BoostMethod::LegacyAdditive => {
                            legacy_additive(&boost, z, d).unwrap().value()
                        }
                    }
                })
                .collect();
            zf[3] += 0.01;
            zf[77] -= 0.004;
            let f = fit_apex(&dirs, &zh, &zf, method, 1e-9).unwrap();
            assert!((f.speed_km_s - apex.speed_km_s).abs() < 1e-3, "{f:?}");
            assert!((f.l_deg - apex.glon_deg).abs() < 1e-4, "{f:?}");
            assert!((f.b_deg - apex.glat_deg).abs() < 1e-4, "{f:?}");
            assert_eq!(f.n_used, 198);
        }
    }
}
