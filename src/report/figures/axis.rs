//! Axes: linear and logarithmic ranges with round ticks, number formatting, and clipping a
//! curve to an axis range.

use plotters::coord::ranged1d::{KeyPointHint, NoDefaultFormatting, Ranged, ValueFormatter};

/// A linear or base-10 logarithmic axis with round tick values.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Axis {
    pub(super) lo: f64,
    pub(super) hi: f64,
    log: bool,
}

impl Axis {
    pub(super) fn linear(lo: f64, hi: f64) -> Axis {
        let (lo, hi) = widen(lo, hi, false);
        Axis { lo, hi, log: false }
    }

    pub(super) fn log(lo: f64, hi: f64) -> Axis {
        let (lo, hi) = widen(lo, hi, true);
        Axis { lo, hi, log: true }
    }

    pub(super) fn t(&self, v: f64) -> f64 {
        if self.log {
            v.log10()
        } else {
            v
        }
    }

    pub(super) fn contains(&self, v: f64) -> bool {
        v >= self.lo && v <= self.hi
    }

    pub(super) fn clamp(&self, v: f64) -> f64 {
        v.clamp(self.lo, self.hi)
    }

    /// Round tick values, at most about `max_n` of them.
    pub(super) fn ticks(&self, max_n: usize) -> Vec<f64> {
        let max_n = max_n.max(2);
        if self.log {
            let decades = (self.hi / self.lo).log10();
            let sets: [&[f64]; 4] = [
                &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0],
                &[1.0, 2.0, 3.0, 5.0],
                &[1.0, 2.0, 5.0],
                &[1.0],
            ];
            let start = if decades < 0.8 {
                0
            } else if decades < 2.5 {
                1
            } else if decades < 5.0 {
                2
            } else {
                3
            };
            for set in &sets[start..] {
                let v = log_ticks(self.lo, self.hi, set);
                if v.len() <= max_n || set.len() == 1 {
                    return v;
                }
            }
            log_ticks(self.lo, self.hi, &[1.0])
        } else {
            let step = nice_step((self.hi - self.lo) / max_n as f64);
            let first = (self.lo / step - 1e-9).ceil() as i64;
            let last = (self.hi / step + 1e-9).floor() as i64;
            (first..=last).map(|k| k as f64 * step).collect()
        }
    }
}

pub(super) fn log_ticks(lo: f64, hi: f64, mantissas: &[f64]) -> Vec<f64> {
    let mut v = Vec::new();
    let d0 = lo.log10().floor() as i32;
    let d1 = hi.log10().ceil() as i32;
    for d in d0..=d1 {
        for m in mantissas {
            let t = m * 10f64.powi(d);
            if t >= lo * (1.0 - 1e-9) && t <= hi * (1.0 + 1e-9) {
                v.push(t);
            }
        }
    }
    v
}

/// A usable (lo, hi): finite, ordered, of non-zero width (and positive on a log axis).
pub(super) fn widen(lo: f64, hi: f64, log: bool) -> (f64, f64) {
    let (mut lo, mut hi) = if lo.is_finite() && hi.is_finite() {
        (lo.min(hi), lo.max(hi))
    } else if log {
        (0.01, 0.1)
    } else {
        (0.0, 1.0)
    };
    if log {
        if hi <= 0.0 {
            return (0.01, 0.1);
        }
        if lo <= 0.0 {
            lo = hi / 100.0;
        }
        if hi / lo < 1.01 {
            lo /= 1.5;
            hi *= 1.5;
        }
    } else if hi - lo <= 1e-12 * (1.0 + lo.abs()) {
        let pad = if lo == 0.0 { 1.0 } else { 0.1 * lo.abs() };
        lo -= pad;
        hi += pad;
    }
    (lo, hi)
}

impl Ranged for Axis {
    type FormatOption = NoDefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        let a = self.t(self.lo);
        let b = self.t(self.hi);
        let f = (self.t(*value) - a) / (b - a);
        let f = if f.is_finite() {
            f.clamp(-10.0, 10.0)
        } else {
            0.0
        };
        (limit.0 as f64 + f * (limit.1 - limit.0) as f64).round() as i32
    }

    fn key_points<H: KeyPointHint>(&self, hint: H) -> Vec<f64> {
        self.ticks(hint.bold_points().min(hint.max_num_points()))
    }

    fn range(&self) -> std::ops::Range<f64> {
        self.lo..self.hi
    }
}

impl ValueFormatter<f64> for Axis {
    fn format(value: &f64) -> String {
        number(*value)
    }
    fn format_ext(&self, value: &f64) -> String {
        number(*value)
    }
}

/// 1, 2, 2.5 or 5 times a power of ten, at least `raw`.
pub(super) fn nice_step(raw: f64) -> f64 {
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let p = 10f64.powf(raw.log10().floor());
    for m in [1.0, 2.0, 2.5, 5.0, 10.0] {
        if m * p >= raw * (1.0 - 1e-12) {
            return m * p;
        }
    }
    10.0 * p
}

/// The smallest of 1, 1.5, 2, 2.5, 3, 4, 5, 6, 8 times a power of ten that is ≥ `v`.
pub(super) fn nice_ceil(v: f64) -> f64 {
    if !(v.is_finite() && v > 0.0) {
        return 1.0;
    }
    let p = 10f64.powf(v.log10().floor());
    for m in [1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0] {
        if m * p >= v * (1.0 - 1e-12) {
            return m * p;
        }
    }
    10.0 * p
}

/// A tick or legend number: up to 6 significant digits, no trailing zeros, a true minus.
pub(crate) fn number(v: f64) -> String {
    if !v.is_finite() {
        return "—".into();
    }
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    let text = if !(1e-4..1e7).contains(&a) {
        format!("{a:.3e}")
    } else {
        let decimals = (5 - a.log10().floor() as i32).clamp(0, 10) as usize;
        let t = format!("{a:.decimals$}");
        if t.contains('.') {
            t.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            t
        }
    };
    if v < 0.0 {
        format!("−{text}")
    } else {
        text
    }
}

/// A number rounded to `decimals`, with a true minus sign.
pub(super) fn fixed(v: f64, decimals: usize) -> String {
    let t = format!("{:.*}", decimals, v.abs());
    let zero = t.chars().all(|c| c == '0' || c == '.');
    if v < 0.0 && !zero {
        format!("−{t}")
    } else {
        t
    }
}

/// Split a curve into the pieces that lie inside the y range (crossings interpolated).
pub(super) fn clip_curve(points: &[(f64, f64)], y: &Axis) -> Vec<Vec<(f64, f64)>> {
    let mut pieces = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    for w in points.windows(2) {
        let (a, b) = (w[0], w[1]);
        if !(a.1.is_finite() && b.1.is_finite()) {
            if current.len() > 1 {
                pieces.push(std::mem::take(&mut current));
            }
            current.clear();
            continue;
        }
        let cross = |p: (f64, f64), q: (f64, f64), level: f64| {
            let f = (level - p.1) / (q.1 - p.1);
            (p.0 + f * (q.0 - p.0), level)
        };
        let inside = |p: (f64, f64)| y.contains(p.1);
        match (inside(a), inside(b)) {
            (true, true) => {
                if current.is_empty() {
                    current.push(a);
                }
                current.push(b);
            }
            (true, false) => {
                if current.is_empty() {
                    current.push(a);
                }
                let level = if b.1 > y.hi { y.hi } else { y.lo };
                current.push(cross(a, b, level));
                pieces.push(std::mem::take(&mut current));
            }
            (false, true) => {
                let level = if a.1 > y.hi { y.hi } else { y.lo };
                current = vec![cross(a, b, level), b];
            }
            (false, false) => {}
        }
    }
    if current.len() > 1 {
        pieces.push(current);
    }
    pieces
}
#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round() {
        assert_eq!(
            Axis::linear(0.0, 10.0).ticks(6),
            vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]
        );
        let t = Axis::log(0.003, 0.1).ticks(9);
        assert_eq!(t.len(), 7, "{t:?}");
        assert!((t[0] - 0.003).abs() < 1e-12 && (t[6] - 0.1).abs() < 1e-12);
        assert_eq!(number(0.30000000000000004), "0.3");
        assert_eq!(number(-1500.0), "−1500");
        assert_eq!(number(0.003), "0.003");
        assert_eq!(nice_ceil(2710.0), 3000.0);
    }

    #[test]
    fn clipping_keeps_inside_pieces() {
        let y = Axis::linear(-1.0, 1.0);
        let pts = vec![(0.0, -3.0), (1.0, 0.0), (2.0, 3.0), (3.0, 0.5), (4.0, 0.0)];
        let pieces = clip_curve(&pts, &y);
        assert_eq!(pieces.len(), 2);
        for p in pieces.iter().flatten() {
            assert!(p.1 >= -1.0 && p.1 <= 1.0);
        }
    }
}
