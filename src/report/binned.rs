//! Error-weighted means in bins, and a straight line fitted to them: what the velocity
//! figures plot instead of a running median.
//!
//! * The inverse-variance weighted mean ȳ = Σ wᵢyᵢ / Σ wᵢ, wᵢ = 1/σᵢ², with error
//!   (Σ wᵢ)^{-1/2} (P. R. Bevington & D. K. Robinson, "Data Reduction and Error Analysis for the
//!   Physical Sciences", 3rd ed., eqs. 4.17–4.19; from memory). When the values scatter more
//!   than their errors say (χ²/(n−1) > 1) the error is multiplied by √(χ²/(n−1)), the scale
//!   factor of the Particle Data Group's averages (common practice).
//! * The weighted straight line y = a + b x by least squares, with the errors of a and b from
//!   the normal equations (Bevington & Robinson eq. 6.12 and 6.21; from memory).
//!
//! Pure: no I/O.

/// One bin of x, and the weighted mean of the values in it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bin {
    pub x_lo: f64,
    pub x_hi: f64,
    /// The weighted mean x of the bin's points (where its mean value sits).
    pub x_mean: f64,
    pub n: usize,
    pub mean: f64,
    pub err: f64,
}

/// A weighted mean, its error (scaled up when the scatter exceeds the errors) and χ².
pub fn weighted_mean(values: &[(f64, f64)]) -> Option<(f64, f64, f64)> {
    let pts: Vec<(f64, f64)> = values
        .iter()
        .copied()
        .filter(|(y, e)| y.is_finite() && e.is_finite() && *e > 0.0)
        .collect();
    if pts.is_empty() {
        return None;
    }
    let sw: f64 = pts.iter().map(|(_, e)| 1.0 / (e * e)).sum();
    let mean = pts.iter().map(|(y, e)| y / (e * e)).sum::<f64>() / sw;
    let chi2: f64 = pts.iter().map(|(y, e)| ((y - mean) / e).powi(2)).sum();
    let mut err = 1.0 / sw.sqrt();
    if pts.len() > 1 {
        let s = chi2 / (pts.len() - 1) as f64;
        if s > 1.0 {
            err *= s.sqrt();
        }
    }
    Some((mean, err, chi2))
}

/// Bin edges holding (nearly) equal numbers of the finite `xs`: `bins` + 1 edges from the
/// smallest to the largest x; fewer bins when there are too few points (at least `min_per_bin`
/// each).
pub fn equal_count_edges(xs: &[f64], bins: usize, min_per_bin: usize) -> Vec<f64> {
    let mut v: Vec<f64> = xs.iter().copied().filter(|x| x.is_finite()).collect();
    v.sort_by(f64::total_cmp);
    let bins = bins.min(v.len() / min_per_bin.max(1));
    if bins == 0 {
        return Vec::new();
    }
    let mut edges: Vec<f64> = (0..=bins)
        .map(|k| v[((k * (v.len() - 1)) as f64 / bins as f64).round() as usize])
        .collect();
    edges.dedup();
    edges
}

/// Weighted means of the points (x, y, σ_y) in each bin between consecutive `edges` (the last
/// bin includes its upper edge); bins without a usable point are left out.
pub fn weighted_bins(points: &[(f64, f64, f64)], edges: &[f64]) -> Vec<Bin> {
    let mut out = Vec::new();
    for (k, w) in edges.windows(2).enumerate() {
        let last = k + 2 == edges.len();
        let inside: Vec<(f64, f64, f64)> = points
            .iter()
            .copied()
            .filter(|p| p.0 >= w[0] && (p.0 < w[1] || (last && p.0 <= w[1])))
            .filter(|p| p.1.is_finite() && p.2.is_finite() && p.2 > 0.0)
            .collect();
        let ys: Vec<(f64, f64)> = inside.iter().map(|p| (p.1, p.2)).collect();
        let Some((mean, err, _)) = weighted_mean(&ys) else {
            continue;
        };
        let xs: Vec<(f64, f64)> = inside.iter().map(|p| (p.0, p.2)).collect();
        let x_mean = weighted_mean(&xs).map_or(0.5 * (w[0] + w[1]), |m| m.0);
        out.push(Bin {
            x_lo: w[0],
            x_hi: w[1],
            x_mean,
            n: inside.len(),
            mean,
            err,
        });
    }
    out
}

/// A weighted straight line y = intercept + slope · x.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Line {
    pub intercept: f64,
    pub intercept_err: f64,
    pub slope: f64,
    pub slope_err: f64,
    pub chi2: f64,
    pub dof: usize,
}

/// The weighted least-squares line through (x, y, σ_y); None with fewer than 3 usable points
/// or all x equal.
pub fn weighted_line(points: &[(f64, f64, f64)]) -> Option<Line> {
    let pts: Vec<(f64, f64, f64)> = points
        .iter()
        .copied()
        .filter(|p| p.0.is_finite() && p.1.is_finite() && p.2.is_finite() && p.2 > 0.0)
        .collect();
    if pts.len() < 3 {
        return None;
    }
    let (mut s, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for &(x, y, e) in &pts {
        let w = 1.0 / (e * e);
        s += w;
        sx += w * x;
        sy += w * y;
        sxx += w * x * x;
        sxy += w * x * y;
    }
    let delta = s * sxx - sx * sx;
    if delta.is_nan() || delta <= 0.0 {
        return None;
    }
    let intercept = (sxx * sy - sx * sxy) / delta;
    let slope = (s * sxy - sx * sy) / delta;
    let chi2 = pts
        .iter()
        .map(|&(x, y, e)| ((y - intercept - slope * x) / e).powi(2))
        .sum();
    Some(Line {
        intercept,
        intercept_err: (sxx / delta).sqrt(),
        slope,
        slope_err: (s / delta).sqrt(),
        chi2,
        dof: pts.len() - 2,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn equal_errors_give_the_plain_mean_and_sigma_over_root_n() {
        // Analytic: with equal σ the weighted mean is the arithmetic mean, error σ/√n.
        let v: Vec<(f64, f64)> = [1.0, 2.0, 3.0, 4.0].iter().map(|&y| (y, 2.0)).collect();
        let (m, e, chi2) = weighted_mean(&v).unwrap();
        assert!((m - 2.5).abs() < 1e-12);
        assert!((e - 1.0).abs() < 1e-12, "{e}");
        assert!((chi2 - 5.0 / 4.0).abs() < 1e-12);
    }

    #[test]
    fn line_through_exact_points_and_its_slope_error() {
        // Analytic: for equal σ, σ_b = σ / √(Σ (x − x̄)²).
        let pts: Vec<(f64, f64, f64)> = (0..5)
            .map(|i| (i as f64, 3.0 + 0.5 * i as f64, 0.1))
            .collect();
        let l = weighted_line(&pts).unwrap();
        assert!((l.slope - 0.5).abs() < 1e-12 && (l.intercept - 3.0).abs() < 1e-12);
        assert!((l.slope_err - 0.1 / 10f64.sqrt()).abs() < 1e-12);
        assert!(l.chi2 < 1e-20 && l.dof == 3);
    }

    #[test]
    fn equal_count_bins() {
        let xs: Vec<f64> = (0..100).map(|i| i as f64).collect();
        let e = equal_count_edges(&xs, 4, 10);
        assert_eq!(e.len(), 5);
        let pts: Vec<(f64, f64, f64)> = xs.iter().map(|&x| (x, 1.0, 1.0)).collect();
        let b = weighted_bins(&pts, &e);
        assert_eq!(b.iter().map(|b| b.n).sum::<usize>(), 100);
        assert!(equal_count_edges(&xs, 4, 60).len() == 2);
    }
}
