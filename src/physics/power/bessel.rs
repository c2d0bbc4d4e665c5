//! Spherical Bessel helpers of the k integrals: series and closed forms of j0, j1/x and
//! j2/x², the top-hat window, and a branch-free sin/cos for the window's inner loop.

use std::f64::consts::FRAC_2_PI;

/// Taylor coefficients of j1(x)/x in x²: (−1)^s / (2^s s! (2s+3)!!).
pub(super) const J1_OVER_X: [f64; 9] = [
    1.0 / 3.0,
    -1.0 / 30.0,
    1.0 / 840.0,
    -1.0 / 45360.0,
    1.0 / 3991680.0,
    -1.0 / 518918400.0,
    1.0 / 93405312000.0,
    -1.0 / 22230464256000.0,
    1.0 / 6758061133824000.0,
];

/// Taylor coefficients of j2(x)/x² in x²: (−1)^s / (2^s s! (2s+5)!!).
pub(super) const J2_OVER_X2: [f64; 9] = [
    1.0 / 15.0,
    -1.0 / 210.0,
    1.0 / 7560.0,
    -1.0 / 498960.0,
    1.0 / 51891840.0,
    -1.0 / 7783776000.0,
    1.0 / 1587890304000.0,
    -1.0 / 422378820864000.0,
    1.0 / 141919283810304000.0,
];

#[inline(always)]
pub(super) fn horner(c: &[f64; 9], y: f64) -> f64 {
    let mut acc = c[8];
    for &ci in c[..8].iter().rev() {
        acc = acc * y + ci;
    }
    acc
}

/// j1(x)/x = (sin x − x cos x)/x³; the series (9 terms, error < 10⁻²¹) below x = 1.
#[inline]
fn j1_over_x(x: f64) -> f64 {
    if x.abs() < 1.0 {
        horner(&J1_OVER_X, x * x)
    } else {
        let (s, c) = sin_cos_fast(x);
        (s - x * c) / (x * x * x)
    }
}

/// j2(x)/x² = ((3 − x²) sin x − 3x cos x)/x⁵; the series below x = 1. (The hot loop inlines
/// the same two branches; this scalar form serves the tests.)
#[cfg(test)]
fn j2_over_x2(x: f64) -> f64 {
    if x.abs() < 1.0 {
        horner(&J2_OVER_X2, x * x)
    } else {
        let (s, c) = sin_cos_fast(x);
        let x2 = x * x;
        ((3.0 - x2) * s - 3.0 * x * c) / (x2 * x2 * x)
    }
}

/// j0(x) = sin x / x.
#[inline]
pub(super) fn j0(x: f64) -> f64 {
    if x.abs() < 1e-4 {
        1.0 - x * x / 6.0
    } else {
        x.sin() / x
    }
}

/// Fourier transform of the real-space top-hat of unit volume: W(x) = 3 (sin x − x cos x)/x³
/// = 3 j1(x)/x, with its series for x < 1.
pub fn tophat_window(x: f64) -> f64 {
    3.0 * j1_over_x(x)
}

/// π/2 split into two 33-bit parts and a remainder (Cody & Waite reduction): n·PIO2_1 and
/// n·PIO2_2 are exact for |n| < 2²⁰. Bit patterns of 1.5707963267341256,
/// 6.077100506303966e-11 and 2.0222662487959506e-21.
const PIO2_1: f64 = f64::from_bits(0x3ff9_21fb_5440_0000);
const PIO2_2: f64 = f64::from_bits(0x3dd0_b461_1a60_0000);
const PIO2_3: f64 = f64::from_bits(0x3ba3_198a_2e03_7073);

/// Largest |x| for the reduction of [`sin_cos_reduced`] (n·PIO2_1 exact for |n| < 2²⁰).
pub(super) const SIN_COS_REDUCED_MAX: f64 = 1.0e6;

/// sin and cos of x together, without branches (so the compiler can vectorise the window's k
/// loop):
/// Cody–Waite reduction to |r| ≤ π/4 and Taylor polynomials of degree 17 and 18 (truncation
/// < 10⁻¹⁹), the quadrant applied with bit operations. Valid for |x| < 10⁶; agrees with the
/// standard library to ~1 ulp there.
#[inline(always)]
pub(super) fn sin_cos_reduced(x: f64) -> (f64, f64) {
    // 1.5·2⁵²: adding it rounds x·2/π to an integer n held in the low mantissa bits
    // (two's complement modulo 4 for negative n).
    const SHIFT: f64 = 6_755_399_441_055_744.0;
    let t = x * FRAC_2_PI + SHIFT;
    let bits = t.to_bits();
    let n = t - SHIFT;
    let r = ((x - n * PIO2_1) - n * PIO2_2) - n * PIO2_3;
    let r2 = r * r;
    let ps = -1.0 / 6.0
        + r2 * (1.0 / 120.0
            + r2 * (-1.0 / 5040.0
                + r2 * (1.0 / 362880.0
                    + r2 * (-1.0 / 39916800.0
                        + r2 * (1.0 / 6227020800.0
                            + r2 * (-1.0 / 1307674368000.0 + r2 * (1.0 / 355687428096000.0)))))));
    let pc = 1.0 / 24.0
        + r2 * (-1.0 / 720.0
            + r2 * (1.0 / 40320.0
                + r2 * (-1.0 / 3628800.0
                    + r2 * (1.0 / 479001600.0
                        + r2 * (-1.0 / 87178291200.0
                            + r2 * (1.0 / 20922789888000.0 + r2 * (-1.0 / 6402373705728000.0)))))));
    let s = r + r * r2 * ps;
    let c = 1.0 - 0.5 * r2 + r2 * r2 * pc;
    // Quadrant q = n mod 4: sin x = (s, c, −s, −c)[q], cos x = (c, −s, −c, s)[q].
    let swap = 0u64.wrapping_sub(bits & 1);
    let (sb, cb) = (s.to_bits(), c.to_bits());
    let sin_bits = (sb & !swap) | (cb & swap);
    let cos_bits = (cb & !swap) | (sb & swap);
    let sin_sign = (bits & 2) << 62;
    let cos_sign = (bits.wrapping_add(1) & 2) << 62;
    (
        f64::from_bits(sin_bits ^ sin_sign),
        f64::from_bits(cos_bits ^ cos_sign),
    )
}

/// [`sin_cos_reduced`] with the standard library beyond its range (and for NaN).
#[inline(always)]
pub(super) fn sin_cos_fast(x: f64) -> (f64, f64) {
    if x.abs() < SIN_COS_REDUCED_MAX {
        sin_cos_reduced(x)
    } else {
        x.sin_cos()
    }
}
#[cfg(test)]
mod tests {
    use super::*;

    /// Our fast sin/cos against the standard library (itself correctly rounded to < 1 ulp).
    #[test]
    fn sin_cos_fast_matches_std() {
        let mut worst: f64 = 0.0;
        let mut x = 1e-3;
        while x < 2e5 {
            for v in [x, -x, x * 1.000_000_123] {
                let (s, c) = sin_cos_fast(v);
                let (s0, c0) = v.sin_cos();
                worst = worst.max((s - s0).abs()).max((c - c0).abs());
            }
            x *= 1.0007;
        }
        assert!(worst < 4e-16, "worst {worst}");
        // The fall-back region and special values.
        assert_eq!(sin_cos_fast(3e6), 3e6_f64.sin_cos());
        assert!(sin_cos_fast(f64::NAN).0.is_nan());
    }

    /// The series and closed forms of j1/x and j2/x² meet at x = 1 (and agree nearby).
    #[test]
    fn bessel_series_match_closed_forms() {
        for x in [0.6_f64, 0.8, 0.999_999, 1.0, 1.3] {
            let (s, c) = x.sin_cos();
            let a = (s - x * c) / (x * x * x);
            let b = ((3.0 - x * x) * s - 3.0 * x * c) / x.powi(5);
            assert!((horner(&J1_OVER_X, x * x) / a - 1.0).abs() < 1e-14, "{x}");
            assert!((horner(&J2_OVER_X2, x * x) / b - 1.0).abs() < 1e-12, "{x}");
            assert!((j1_over_x(x) / a - 1.0).abs() < 1e-14);
            assert!((j2_over_x2(x) / b - 1.0).abs() < 1e-12);
        }
        // Limits: W(0) = 1, j2/x² → 1/15.
        assert_eq!(tophat_window(0.0), 1.0);
        assert_eq!(j2_over_x2(0.0), 1.0 / 15.0);
    }
}
