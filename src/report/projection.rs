//! The Mollweide equal-area projection of the whole sky.
//!
//! Formulas from J. P. Snyder (1987), "Map Projections — A Working Manual", U.S. Geological
//! Survey Professional Paper 1395, chapter on the Mollweide projection (forward equations for
//! the sphere): with R = 1,
//!
//! ```text
//! x = (2√2 / π) (λ − λ₀) cos θ,     y = √2 sin θ,     2θ + sin 2θ = π sin φ,
//! ```
//!
//! θ found by Newton's iteration on θ' = 2θ:
//! Δθ' = −(θ' + sin θ' − π sin φ) / (1 + cos θ'). The whole sphere maps onto an ellipse with
//! semi-axes 2√2 and √2 (area 4π, the sphere's), and areas are preserved everywhere.
//!
//! Sky maps are drawn as seen from inside the sphere: longitude increases to the left, with
//! the centre of the map at longitude `lon0` (0° here).

use std::f64::consts::{FRAC_PI_2, PI, SQRT_2};

/// Half-width of the projected ellipse (R = 1).
pub const HALF_WIDTH: f64 = 2.0 * SQRT_2;
/// Half-height of the projected ellipse (R = 1).
pub const HALF_HEIGHT: f64 = SQRT_2;

/// The auxiliary angle θ (radians) for latitude `phi` (radians).
pub fn auxiliary_angle(phi: f64) -> f64 {
    if phi.abs() >= FRAC_PI_2 - 1e-12 {
        return FRAC_PI_2.copysign(phi);
    }
    let target = PI * phi.sin();
    // A start close to the root everywhere (exact at the equator and the poles).
    let mut t = 2.0 * (2.0 * phi / PI).asin();
    for _ in 0..60 {
        let f = t + t.sin() - target;
        let d = 1.0 + t.cos();
        if d <= 1e-15 {
            break;
        }
        let step = f / d;
        t -= step;
        if step.abs() < 1e-13 {
            break;
        }
    }
    0.5 * t
}

/// Project (longitude, latitude) in degrees to map coordinates (x, y), R = 1, longitude
/// increasing to the left, `lon0_deg` at the centre.
pub fn mollweide(lon_deg: f64, lat_deg: f64, lon0_deg: f64) -> (f64, f64) {
    // Longitude offset from the centre, wrapped into [−180°, 180°).
    let dl = (lon_deg - lon0_deg + 180.0).rem_euclid(360.0) - 180.0;
    let lambda = dl.to_radians();
    let theta = auxiliary_angle(lat_deg.to_radians());
    let x = -(2.0 * SQRT_2 / PI) * lambda * theta.cos();
    let y = SQRT_2 * theta.sin();
    (x, y)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn auxiliary_angle_solves_its_equation() {
        for i in -90..=90 {
            let phi = (i as f64).to_radians();
            let t = auxiliary_angle(phi);
            assert!(
                (2.0 * t + (2.0 * t).sin() - PI * phi.sin()).abs() < 1e-9,
                "{i}"
            );
        }
    }

    #[test]
    fn ellipse_edges_and_centre() {
        let (x, y) = mollweide(0.0, 0.0, 0.0);
        assert!(x.abs() < 1e-15 && y.abs() < 1e-15);
        // Longitude increases to the left: l = 90° lies left of the centre.
        assert!(mollweide(90.0, 0.0, 0.0).0 < 0.0);
        assert!(mollweide(270.0, 0.0, 0.0).0 > 0.0);
        let (x, _) = mollweide(179.999_999, 0.0, 0.0);
        assert!((x + HALF_WIDTH).abs() < 1e-6);
        let (_, y) = mollweide(10.0, 90.0, 0.0);
        assert!((y - HALF_HEIGHT).abs() < 1e-12);
    }

    #[test]
    fn equal_area_above_any_parallel() {
        // Area of the ellipse above the image of latitude φ equals the spherical cap
        // 2π(1 − sin φ): the segment above y₀ = √2 sin θ has area 2π − 2(2θ + sin 2θ).
        for deg in [-75.0_f64, -30.0, 0.0, 10.0, 45.0, 80.0] {
            let phi = deg.to_radians();
            let (_, y0) = mollweide(0.0, deg, 0.0);
            // Numerical integral of the ellipse's width above y0.
            let n = 200_000;
            let h = (HALF_HEIGHT - y0) / n as f64;
            let mut area = 0.0;
            for k in 0..n {
                let y = y0 + (k as f64 + 0.5) * h;
                let w = 2.0 * HALF_WIDTH * (1.0 - (y / HALF_HEIGHT).powi(2)).max(0.0).sqrt();
                area += w * h;
            }
            let cap = 2.0 * PI * (1.0 - phi.sin());
            assert!(
                (area - cap).abs() < 1e-4 * (1.0 + cap),
                "{deg}: {area} vs {cap}"
            );
        }
    }
}
