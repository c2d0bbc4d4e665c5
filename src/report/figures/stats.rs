//! Statistics for the figures: sorted finite values, quantiles and running medians.

/// Quantile `q` of sorted finite values (linear interpolation); NaN if empty.
pub(super) fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let pos = q.clamp(0.0, 1.0) * (sorted.len() - 1) as f64;
    let i = pos.floor() as usize;
    let j = (i + 1).min(sorted.len() - 1);
    let f = pos - i as f64;
    sorted[i] * (1.0 - f) + sorted[j] * f
}

pub(super) fn sorted(values: impl IntoIterator<Item = f64>) -> Vec<f64> {
    let mut v: Vec<f64> = values.into_iter().filter(|x| x.is_finite()).collect();
    v.sort_by(f64::total_cmp);
    v
}

/// Running medians along x: windows of `width` points (sorted by x), every `step` points;
/// each entry is the median x and the medians of each of the value columns.
pub(super) fn running_medians(
    points: &mut [(f64, [f64; 2])],
    width: usize,
    step: usize,
) -> Vec<(f64, [f64; 2])> {
    points.sort_by(|a, b| a.0.total_cmp(&b.0));
    let n = points.len();
    if n < 3 {
        return Vec::new();
    }
    let width = width.clamp(3, n);
    let step = step.max(1);
    let mut out = Vec::new();
    let mut start = 0;
    loop {
        let w = &points[start..start + width];
        let xs = sorted(w.iter().map(|p| p.0));
        let a = sorted(w.iter().map(|p| p.1[0]));
        let b = sorted(w.iter().map(|p| p.1[1]));
        out.push((quantile(&xs, 0.5), [quantile(&a, 0.5), quantile(&b, 0.5)]));
        if start + width >= n {
            break;
        }
        start = (start + step).min(n - width);
    }
    out
}
#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn running_median_follows_a_line() {
        let mut p: Vec<(f64, [f64; 2])> = (0..101)
            .map(|i| (i as f64, [2.0 * i as f64, 1.0]))
            .collect();
        let m = running_medians(&mut p, 11, 5);
        assert!(m.len() > 5);
        for (x, v) in m {
            assert!((v[0] - 2.0 * x).abs() < 1e-9 && v[1] == 1.0);
        }
    }
}
