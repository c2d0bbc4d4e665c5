//! Statistics for the figures: sorted finite values and quantiles.

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
