//! Colours: the diverging velocity scale and the fixed palette of the figures.
//!
//! The velocity scale is the "cool to warm" diverging map built by the construction of
//! K. Moreland (2009), "Diverging Color Maps for Scientific Visualization", in Advances in
//! Visual Computing (ISVC 2009), LNCS 5876, pp. 92–103: the two end colours are taken to the
//! polar form (M, s, h) of CIELAB ("Msh": magnitude, saturation angle, hue angle), and the map
//! is interpolated linearly in Msh through a neutral (s = 0) midpoint of magnitude
//! max(M₁, M₂, 88), with the hue of the unsaturated side spun so that lightness changes evenly
//! (the paper's `AdjustHue`). Lightness then rises monotonically from each end to the centre,
//! so equal steps in velocity read as equal steps in colour, and the centre (zero velocity)
//! is a light neutral grey. End colours are the paper's recommended pair, sRGB (59, 76, 192)
//! and (180, 4, 38). Colour conversions: sRGB (IEC 61966-2-1) with the D65 white point,
//! CIE 1976 L*a*b*.

use std::f64::consts::PI;
use std::sync::OnceLock;

use plotters::style::RGBColor;

/// Ink for text, axes and model curves.
pub const INK: RGBColor = RGBColor(28, 32, 40);
/// Ordinary data points in the scatter figures (a deep slate blue).
pub const POINT: RGBColor = RGBColor(46, 84, 128);
/// Error bars (a light blue-grey).
pub const ERRORBAR: RGBColor = RGBColor(150, 166, 186);
/// Outliers, everywhere: open markers in a saturated green, a hue that neither end of the
/// velocity scale nor the point colour uses.
pub const OUTLIER: RGBColor = RGBColor(0, 150, 70);
/// Running statistics and highlighted curves (a warm dark orange).
pub const ACCENT: RGBColor = RGBColor(204, 102, 0);
/// Mock truth curves (a muted purple).
pub const TRUTH: RGBColor = RGBColor(120, 60, 150);
/// Light background of the sky map.
pub const SKY_BACKGROUND: RGBColor = RGBColor(246, 246, 244);
/// Grid lines.
pub const GRID: RGBColor = RGBColor(200, 200, 200);

/// Moreland's end colours for the cool-to-warm map.
const COOL: [f64; 3] = [59.0, 76.0, 192.0];
const WARM: [f64; 3] = [180.0, 4.0, 38.0];
/// Entries of the tabulated map.
const LUT_SIZE: usize = 257;

/// The diverging colour for `t` in [0, 1] (0 = most negative, 0.5 = zero, 1 = most
/// positive); values outside are clamped.
pub fn diverging(t: f64) -> RGBColor {
    let lut = LUT.get_or_init(|| {
        (0..LUT_SIZE)
            .map(|i| {
                let c = interpolate(COOL, WARM, i as f64 / (LUT_SIZE - 1) as f64);
                RGBColor(c[0], c[1], c[2])
            })
            .collect()
    });
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.5
    };
    lut[(t * (LUT_SIZE - 1) as f64).round() as usize]
}

static LUT: OnceLock<Vec<RGBColor>> = OnceLock::new();

/// Moreland (2009), appendix `InterpolateColor`: the colour a fraction `interp` of the way
/// from `rgb1` to `rgb2` (sRGB, 0–255).
pub fn interpolate(rgb1: [f64; 3], rgb2: [f64; 3], interp: f64) -> [u8; 3] {
    let mut m1 = lab_to_msh(srgb_to_lab(rgb1));
    let mut m2 = lab_to_msh(srgb_to_lab(rgb2));
    let mut t = interp;
    // Two distinct saturated colours: go through a neutral midpoint.
    if m1[1] > 0.05 && m2[1] > 0.05 && angle_difference(m1[2], m2[2]) > PI / 3.0 {
        let mid = m1[0].max(m2[0]).max(88.0);
        if t < 0.5 {
            m2 = [mid, 0.0, 0.0];
            t *= 2.0;
        } else {
            m1 = [mid, 0.0, 0.0];
            t = 2.0 * t - 1.0;
        }
    }
    // The hue of a neutral endpoint is undefined: spin it from the saturated one.
    if m1[1] < 0.05 && m2[1] > 0.05 {
        m1[2] = adjust_hue(m2, m1[0]);
    } else if m2[1] < 0.05 && m1[1] > 0.05 {
        m2[2] = adjust_hue(m1, m2[0]);
    }
    let mid = [
        (1.0 - t) * m1[0] + t * m2[0],
        (1.0 - t) * m1[1] + t * m2[1],
        (1.0 - t) * m1[2] + t * m2[2],
    ];
    lab_to_srgb(msh_to_lab(mid))
}

fn angle_difference(a: f64, b: f64) -> f64 {
    let d = (a - b).rem_euclid(2.0 * PI);
    d.min(2.0 * PI - d)
}

/// Moreland (2009), appendix `AdjustHue`.
fn adjust_hue(saturated: [f64; 3], m_unsat: f64) -> f64 {
    let [m, s, h] = saturated;
    if m >= m_unsat {
        h
    } else {
        let spin = s * (m_unsat * m_unsat - m * m).sqrt() / (m * s.sin());
        if h > -PI / 3.0 {
            h + spin
        } else {
            h - spin
        }
    }
}

/// D65 reference white (CIE 1931 2° observer), Y normalised to 1.
const WHITE: [f64; 3] = [0.950_47, 1.0, 1.088_83];

fn srgb_to_linear(c: f64) -> f64 {
    let c = c / 255.0;
    if c <= 0.040_45 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

fn linear_to_srgb(c: f64) -> u8 {
    let c = c.clamp(0.0, 1.0);
    let v = if c <= 0.003_130_8 {
        12.92 * c
    } else {
        1.055 * c.powf(1.0 / 2.4) - 0.055
    };
    (v * 255.0).round().clamp(0.0, 255.0) as u8
}

fn srgb_to_lab(rgb: [f64; 3]) -> [f64; 3] {
    let [r, g, b] = rgb.map(srgb_to_linear);
    let xyz = [
        0.412_456_4 * r + 0.357_576_1 * g + 0.180_437_5 * b,
        0.212_672_9 * r + 0.715_152_2 * g + 0.072_175_0 * b,
        0.019_333_9 * r + 0.119_192_0 * g + 0.950_304_1 * b,
    ];
    let f = |t: f64| {
        let d = 6.0 / 29.0;
        if t > d * d * d {
            t.cbrt()
        } else {
            t / (3.0 * d * d) + 4.0 / 29.0
        }
    };
    let fx = f(xyz[0] / WHITE[0]);
    let fy = f(xyz[1] / WHITE[1]);
    let fz = f(xyz[2] / WHITE[2]);
    [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
}

fn lab_to_srgb(lab: [f64; 3]) -> [u8; 3] {
    let fy = (lab[0] + 16.0) / 116.0;
    let fx = fy + lab[1] / 500.0;
    let fz = fy - lab[2] / 200.0;
    let finv = |t: f64| {
        let d = 6.0 / 29.0;
        if t > d {
            t * t * t
        } else {
            3.0 * d * d * (t - 4.0 / 29.0)
        }
    };
    let x = WHITE[0] * finv(fx);
    let y = WHITE[1] * finv(fy);
    let z = WHITE[2] * finv(fz);
    let r = 3.240_454_2 * x - 1.537_138_5 * y - 0.498_531_4 * z;
    let g = -0.969_266_0 * x + 1.876_010_8 * y + 0.041_556_0 * z;
    let b = 0.055_643_4 * x - 0.204_025_9 * y + 1.057_225_2 * z;
    [linear_to_srgb(r), linear_to_srgb(g), linear_to_srgb(b)]
}

fn lab_to_msh(lab: [f64; 3]) -> [f64; 3] {
    let m = (lab[0] * lab[0] + lab[1] * lab[1] + lab[2] * lab[2]).sqrt();
    let s = if m > 0.0 { (lab[0] / m).acos() } else { 0.0 };
    let h = lab[2].atan2(lab[1]);
    [m, s, h]
}

fn msh_to_lab(msh: [f64; 3]) -> [f64; 3] {
    let [m, s, h] = msh;
    [m * s.cos(), m * s.sin() * h.cos(), m * s.sin() * h.sin()]
}

/// CIELAB lightness of an sRGB colour (for tests and checks).
pub fn lightness(c: RGBColor) -> f64 {
    srgb_to_lab([c.0 as f64, c.1 as f64, c.2 as f64])[0]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ends_are_the_published_colours() {
        let a = diverging(0.0);
        let b = diverging(1.0);
        assert!((a.0 as i32 - 59).abs() <= 1 && (a.1 as i32 - 76).abs() <= 1);
        assert!((a.2 as i32 - 192).abs() <= 1);
        assert!((b.0 as i32 - 180).abs() <= 1 && (b.1 as i32 - 4).abs() <= 1);
        assert!((b.2 as i32 - 38).abs() <= 1);
    }

    #[test]
    fn centre_is_the_published_neutral_grey() {
        // Moreland (2009), Table of the cool-to-warm map: 0.5 → (221, 221, 221).
        let c = diverging(0.5);
        for v in [c.0, c.1, c.2] {
            assert!((v as i32 - 221).abs() <= 2, "{c:?}");
        }
    }

    #[test]
    fn lightness_rises_to_the_centre_and_falls_after() {
        let l: Vec<f64> = (0..=20)
            .map(|i| lightness(diverging(i as f64 / 20.0)))
            .collect();
        for i in 0..10 {
            assert!(l[i + 1] > l[i] - 0.3, "{l:?}");
            assert!(l[20 - i - 1] > l[20 - i] - 0.3, "{l:?}");
        }
        assert!(l[10] > l[0] + 30.0 && l[10] > l[20] + 30.0);
    }
}
