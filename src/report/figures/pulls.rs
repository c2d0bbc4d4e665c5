//! Figure (d): velocities in units of their errors, against a unit normal.

use plotters::prelude::*;

use crate::report::colour::{INK, POINT};

use crate::report::ReportError;

use super::axis::{fixed, number, Axis};
use super::layout::{chart, frame, legend, ring, Scale};
use super::stats::{quantile, sorted};
use super::{de, rows_line, Area, Context};

pub(super) fn pulls<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
) -> Result<(), ReportError> {
    let sc = Scale::of(ctx);
    let sample = ctx.sample;
    let truth = sample.has_truth;
    let values: Vec<(f64, bool)> = sample
        .rows
        .iter()
        .filter(|r| r.v.is_finite() && r.v_err.is_finite() && r.v_err > 0.0)
        .filter(|r| !truth || r.truth.is_finite())
        .map(|r| {
            let num = if truth { r.v - r.truth } else { r.v };
            (num / r.v_err, r.outlier)
        })
        .collect();
    let n = values.len();
    let limit: f64 = 5.0;
    let width: f64 = if n >= 400 { 0.25 } else { 0.5 };
    let bins = (2.0 * limit / width).round() as usize;
    let mut core = vec![0usize; bins];
    let mut outl = vec![0usize; bins];
    let (mut below, mut above) = (0usize, 0usize);
    for &(x, o) in &values {
        if x < -limit {
            below += 1;
        } else if x >= limit {
            above += 1;
        } else {
            let i = (((x + limit) / width).floor() as usize).min(bins - 1);
            if o {
                outl[i] += 1;
            } else {
                core[i] += 1;
            }
        }
    }
    let n_out = values.iter().filter(|v| v.1).count();
    let clean = sorted(values.iter().filter(|v| !v.1).map(|v| v.0));
    let m = clean.len() as f64;
    let mean = clean.iter().sum::<f64>() / m;
    let sd = (clean.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (m - 1.0)).sqrt();
    let median = quantile(&clean, 0.5);
    let mad = 1.4826 * quantile(&sorted(clean.iter().map(|x| (x - median).abs())), 0.5);
    let tail = clean.iter().filter(|x| x.abs() > 3.0).count() as f64 / m * 100.0;
    let peak_model = n as f64 * width / (2.0 * std::f64::consts::PI).sqrt();
    let peak = core
        .iter()
        .zip(&outl)
        .map(|(a, b)| (a + b) as f64)
        .fold(peak_model, f64::max);
    let mut t = crate::report::tables::DataTable::new(&[
        "bin_lo",
        "bin_hi",
        "n",
        "n_outliers",
        "unit_normal",
    ]);
    for i in 0..bins {
        let (a, b) = (-limit + i as f64 * width, -limit + (i + 1) as f64 * width);
        let mid = 0.5 * (a + b);
        t.push(vec![
            a.into(),
            b.into(),
            core[i].into(),
            outl[i].into(),
            (peak_model * (-0.5 * mid * mid).exp()).into(),
        ]);
    }
    ctx.set_table(t);
    let x = Axis::linear(-limit, limit);
    let y = Axis::linear(0.0, peak * 1.5);
    let (title, x_desc) = if truth {
        (
            "Velocity errors in units of σ_v: (v_pec − true_v_pec)/σ_v",
            "(v_pec − true_v_pec) / σ_v (dimensionless)",
        )
    } else {
        (
            "Peculiar velocities in units of their errors: v_pec/σ_v",
            "v_pec / σ_v (dimensionless)",
        )
    };
    let mut caption = vec![rows_line(
        n,
        sample,
        if truth {
            " with finite v_pec, true_v_pec and σ_v > 0"
        } else {
            " with finite v_pec and σ_v > 0"
        },
    )];
    caption.push(format!(
        "Outliers: {n_out}, stacked on top as open green bars. Outside ±{}: {below} below, {above} above (in no bin; counted in N). Statistics exclude outliers.",
        number(limit)
    ));
    if !truth {
        caption.push("v_pec/σ_v follows a unit normal only where true velocities are small against the errors; a mock with true_v_pec gives the strict check.".into());
    }
    let body = frame(ctx, root, title, &caption)?;
    let mut c = chart(
        &body,
        sc,
        x,
        y,
        Some(x_desc),
        &format!("rows per bin (width {})", number(width)),
    )?;
    let fill = POINT.mix(0.5).filled();
    let edge = POINT.stroke_width(sc.upx(1.2));
    let x0 = |i: usize| -limit + i as f64 * width;
    c.draw_series(
        core.iter()
            .enumerate()
            .filter(|(_, &k)| k > 0)
            .map(|(i, &k)| Rectangle::new([(x0(i), 0.0), (x0(i + 1), k as f64)], fill)),
    )
    .map_err(de)?
    .label(format!("rows with status ok, not outliers ({})", n - n_out))
    .legend(move |(a, b)| Rectangle::new([(a - 10, b - 8), (a + 10, b + 8)], fill));
    c.draw_series(
        core.iter()
            .enumerate()
            .filter(|(_, &k)| k > 0)
            .map(|(i, &k)| Rectangle::new([(x0(i), 0.0), (x0(i + 1), k as f64)], edge)),
    )
    .map_err(de)?;
    let rs = ring(sc);
    c.draw_series(
        outl.iter()
            .enumerate()
            .filter(|(_, &k)| k > 0)
            .map(|(i, &k)| {
                let base = core[i] as f64;
                Rectangle::new([(x0(i), base), (x0(i + 1), base + k as f64)], rs)
            }),
    )
    .map_err(de)?
    .label(format!("outliers ({n_out}), stacked"))
    .legend(move |(a, b)| Rectangle::new([(a - 10, b - 8), (a + 10, b + 8)], rs));
    let curve: Vec<(f64, f64)> = (0..=400)
        .map(|i| {
            let t = -limit + 2.0 * limit * i as f64 / 400.0;
            (t, peak_model * (-0.5 * t * t).exp())
        })
        .collect();
    let line = INK.stroke_width(sc.upx(3.0));
    c.draw_series(std::iter::once(PathElement::new(curve, line)))
        .map_err(de)?
        .label(format!("unit normal N(0, 1) for N = {n} rows"))
        .legend(move |(a, b)| PathElement::new(vec![(a - 12, b), (a + 12, b)], line));
    let stats_text = if clean.len() > 1 {
        format!(
            "not outliers: mean {}, standard deviation {}, 1.4826 × MAD {}; |x| > 3: {}% (0.27% for a unit normal)",
            fixed(mean, 2),
            fixed(sd, 2),
            fixed(mad, 2),
            fixed(tail, 2)
        )
    } else {
        "too few rows for statistics".to_string()
    };
    let stats_label = stats_text.clone();
    c.draw_series(std::iter::empty::<PathElement<(f64, f64)>>())
        .map_err(de)?
        .label(stats_text)
        .legend(|(a, b)| EmptyElement::at((a, b)));
    let mut occupied: Vec<(f64, f64)> = Vec::new();
    for i in 0..bins {
        let top = (core[i] + outl[i]) as f64;
        let xm = -limit + (i as f64 + 0.5) * width;
        let mut h = 0.0;
        while h <= top {
            occupied.push((xm, h));
            h += (peak / 20.0).max(1.0);
        }
        occupied.push((xm, peak_model * (-0.5 * xm * xm).exp()));
    }
    let labels = vec![
        format!("rows with status ok, not outliers ({})", n - n_out),
        format!("outliers ({n_out}), stacked"),
        format!("unit normal N(0, 1) for N = {n} rows"),
        stats_label.clone(),
    ];
    let pos = super::layout::free_corner(&c, sc, &labels, &occupied);
    legend(&mut c, sc, pos)?;
    Ok(())
}
