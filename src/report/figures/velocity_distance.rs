//! Figure (b): peculiar velocity against comoving distance, with errors and running
//! statistics.

use plotters::element::DashedPathElement;
use plotters::prelude::*;

use crate::report::colour::{ACCENT, INK, TRUTH};

use crate::report::ReportError;

use super::axis::{clip_curve, Axis};
use super::layout::{chart, frame, legend, scatter, Scale};
use super::stats::{quantile, running_medians, sorted};
use super::{de, rows_line, Area, Context};

pub(super) fn velocity_distance<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
) -> Result<(), ReportError> {
    let sc = Scale::of(ctx);
    let sample = ctx.sample;
    let points: Vec<(f64, f64, f64, bool)> = sample
        .rows
        .iter()
        .filter(|r| r.d.is_finite() && r.v.is_finite())
        .map(|r| (r.d, r.v, r.v_err, r.outlier))
        .collect();
    // Distance range from the rows that are not outliers (an outlier's distance can be
    // absurd); the rest are triangles at the edge.
    let core_d = sorted(points.iter().filter(|p| !p.3).map(|p| p.0));
    let ds = if core_d.is_empty() {
        sorted(points.iter().map(|p| p.0))
    } else {
        core_d
    };
    let x = Axis::linear(
        ds.first().copied().unwrap_or(0.0).min(0.0),
        ds.last().copied().unwrap_or(100.0) * 1.04,
    );
    let core = sorted(points.iter().filter(|p| !p.3).map(|p| p.1));
    let vs = if core.is_empty() {
        sorted(points.iter().map(|p| p.1))
    } else {
        core
    };
    let (lo, hi) = (quantile(&vs, 0.01).min(0.0), quantile(&vs, 0.99).max(0.0));
    let pad = 0.12 * (hi - lo).max(100.0);
    let y = Axis::linear(lo - pad, hi + pad);
    let n_out = points.iter().filter(|p| p.3).count();
    let mut stats: Vec<(f64, [f64; 2])> = points
        .iter()
        .filter(|p| !p.3)
        .map(|p| (p.0, [p.1, if p.2.is_finite() { p.2 } else { f64::NAN }]))
        .collect();
    let w = (stats.len() / 25).clamp(5, 120);
    let med = running_medians(&mut stats, w, (w / 5).max(1));
    let mut truth: Vec<(f64, [f64; 2])> = sample
        .rows
        .iter()
        .filter(|r| !r.outlier && r.d.is_finite() && r.truth.is_finite())
        .map(|r| (r.d, [r.truth, 0.0]))
        .collect();
    let truth_med = running_medians(&mut truth, w, (w / 5).max(1));

    let beyond = points
        .iter()
        .filter(|p| !(x.contains(p.0) && y.contains(p.1)))
        .count();
    let caption = vec![
        rows_line(points.len(), sample, " with finite D_C and v_pec"),
        format!(
            "Running statistics over windows of {w} rows in distance (outliers excluded). Outliers: {n_out}, open green rings. {beyond} points beyond the axis ranges are triangles at the edge."
        ),
    ];
    let body = frame(
        ctx,
        root,
        "Peculiar velocity against comoving distance",
        &caption,
    )?;
    let mut c = chart(
        &body,
        sc,
        x,
        y,
        Some("comoving distance D_C (Mpc)"),
        "peculiar velocity v_pec (km/s)",
    )?;
    c.draw_series(std::iter::once(PathElement::new(
        vec![(x.lo, 0.0), (x.hi, 0.0)],
        INK.stroke_width(sc.upx(2.0)),
    )))
    .map_err(de)?;
    scatter(
        &mut c,
        sc,
        &points,
        x,
        y,
        Some("rows with status ok, v_pec ± σ_v"),
    )?;
    if med.len() > 1 {
        let line: Vec<(f64, f64)> = med.iter().map(|m| (m.0, y.clamp(m.1[0]))).collect();
        c.draw_series(std::iter::once(PathElement::new(
            line,
            ACCENT.stroke_width(sc.upx(4.5)),
        )))
        .map_err(de)?
        .label("running median of v_pec")
        .legend(move |(a, b)| {
            PathElement::new(
                vec![(a - 12, b), (a + 12, b)],
                ACCENT.stroke_width(sc.upx(4.5)),
            )
        });
        let dashed = ACCENT.stroke_width(sc.upx(2.5));
        for sign in [1.0, -1.0] {
            let band: Vec<(f64, f64)> = med
                .iter()
                .filter(|m| m.1[1].is_finite())
                .map(|m| (m.0, sign * m.1[1]))
                .collect();
            for piece in clip_curve(&band, &y) {
                c.draw_series(std::iter::once(DashedPathElement::new(
                    piece,
                    sc.px(12.0),
                    sc.px(8.0),
                    dashed,
                )))
                .map_err(de)?;
            }
        }
        c.draw_series(std::iter::empty::<PathElement<(f64, f64)>>())
            .map_err(de)?
            .label("± running median of σ_v (the typical error)")
            .legend(move |(a, b)| {
                DashedPathElement::new(vec![(a - 14, b), (a + 14, b)], 6, 4, dashed)
            });
    }
    if truth_med.len() > 1 {
        let line: Vec<(f64, f64)> = truth_med.iter().map(|m| (m.0, y.clamp(m.1[0]))).collect();
        let style = TRUTH.stroke_width(sc.upx(3.5));
        c.draw_series(std::iter::once(DashedPathElement::new(
            line,
            sc.px(14.0),
            sc.px(6.0),
            style,
        )))
        .map_err(de)?
        .label("running median of true_v_pec (mock truth)")
        .legend(move |(a, b)| DashedPathElement::new(vec![(a - 14, b), (a + 14, b)], 7, 4, style));
    }
    legend(&mut c, sc, SeriesLabelPosition::LowerLeft)?;
    Ok(())
}
