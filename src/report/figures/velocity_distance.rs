//! Figure (b): peculiar velocity against redshift distance D_C(z_cmb) (or, on request, against
//! the distance inferred from the distance indicator, which is biased), with error-weighted
//! means in bins of equal numbers of objects.
//!
//! Why redshift distance: an object whose distance indicator scatters it far gets a negative
//! velocity and one scattered near a positive one, so against the inferred distance the
//! velocities trend downwards even when the truth is flat (the inhomogeneous-Malmquist-like
//! bias of binning in a noisy distance; e.g. Strauss & Willick 1995, Phys. Rep. 261, 271,
//! §6; from memory). The redshift does not carry the distance error, so against it the
//! binned means are free of that trend.
//!
//! The binned means are of v = η/κ (κ = ∂η/∂v), whose errors are Gaussian; the mean of v_pec
//! from log-normal distance errors is biased low by about cz σ²_lnD / 2. The lower panel shows
//! the binned means alone, on their own scale, with the straight line fitted to them.

use plotters::element::DashedPathElement;
use plotters::prelude::*;

use crate::report::binned::{equal_count_edges, weighted_bins, weighted_line, Bin};
use crate::report::colour::{ACCENT, INK, TRUTH};
use crate::report::data::Row;
use crate::report::tables::{DataTable, Value};

use crate::report::ReportError;

use super::axis::{fixed, Axis};
use super::layout::{chart, free_corner, scatter, Scale};
use super::stats::{quantile, sorted};
use super::{de, rows_line, Area, Chart, Context};

/// The columns of `velocity_distance.data.csv` (and `velocity_inferred_distance.data.csv`).
pub(crate) const COLUMNS: [&str; 12] = [
    "distance",
    "d_lo",
    "d_hi",
    "d_mean",
    "n",
    "v_mean",
    "v_mean_err",
    "eta_mean",
    "eta_mean_err",
    "v_pec_mean",
    "v_pec_mean_err",
    "true_v_mean",
];

fn x_of(r: &Row, inferred: bool) -> f64 {
    if inferred {
        r.d
    } else {
        r.depth
    }
}

struct Binned {
    v: Vec<Bin>,
    eta: Vec<Bin>,
    v_pec: Vec<Bin>,
    truth: Vec<Bin>,
    edges: Vec<f64>,
    from_eta: bool,
}

fn binned(ctx: &Context<'_>, inferred: bool) -> Binned {
    let rows: Vec<&Row> = ctx
        .sample
        .rows
        .iter()
        .filter(|r| !r.outlier && x_of(r, inferred).is_finite())
        .collect();
    let xs: Vec<f64> = rows.iter().map(|r| x_of(r, inferred)).collect();
    let bins = (rows.len() / 150).clamp(4, 12);
    let edges = equal_count_edges(&xs, bins, 20);
    let from_eta = rows
        .iter()
        .any(|r| r.eta.is_finite() && r.eta_err > 0.0 && r.kappa > 0.0);
    let v_points: Vec<(f64, f64, f64)> = rows
        .iter()
        .map(|r| {
            if from_eta {
                (x_of(r, inferred), r.eta / r.kappa, r.eta_err / r.kappa)
            } else {
                (x_of(r, inferred), r.v, r.v_err)
            }
        })
        .collect();
    let eta: Vec<(f64, f64, f64)> = rows
        .iter()
        .map(|r| (x_of(r, inferred), r.eta, r.eta_err))
        .collect();
    let v_pec: Vec<(f64, f64, f64)> = rows
        .iter()
        .map(|r| (x_of(r, inferred), r.v, r.v_err))
        .collect();
    // The truth of a mock: plain means (every object weighs the same).
    let truth: Vec<(f64, f64, f64)> = rows
        .iter()
        .filter(|r| r.truth.is_finite())
        .map(|r| (x_of(r, inferred), r.truth, 1.0))
        .collect();
    Binned {
        v: weighted_bins(&v_points, &edges),
        eta: weighted_bins(&eta, &edges),
        v_pec: weighted_bins(&v_pec, &edges),
        truth: weighted_bins(&truth, &edges),
        edges,
        from_eta,
    }
}

fn find(bins: &[Bin], lo: f64) -> Option<&Bin> {
    bins.iter().find(|b| b.x_lo == lo)
}

fn table(b: &Binned, inferred: bool) -> DataTable {
    let mut t = DataTable::new(&COLUMNS);
    let kind = if inferred { "inferred" } else { "redshift" };
    for w in b.edges.windows(2) {
        let Some(v) = find(&b.v, w[0]) else {
            continue;
        };
        let e = find(&b.eta, w[0]);
        let p = find(&b.v_pec, w[0]);
        let tr = find(&b.truth, w[0]);
        let num = |x: Option<&Bin>, f: fn(&Bin) -> f64| Value::Number(x.map_or(f64::NAN, f));
        t.push(vec![
            Value::from(kind),
            w[0].into(),
            w[1].into(),
            v.x_mean.into(),
            v.n.into(),
            v.mean.into(),
            v.err.into(),
            num(e, |b| b.mean),
            num(e, |b| b.err),
            num(p, |b| b.mean),
            num(p, |b| b.err),
            num(tr, |b| b.mean),
        ]);
    }
    t
}

fn draw_bins<'a, DB: DrawingBackend + 'a>(
    c: &mut Chart<'a, DB>,
    sc: Scale,
    bins: &[Bin],
    y: Axis,
    colour: RGBColor,
    label: &str,
) -> Result<(), ReportError> {
    let style = colour.stroke_width(sc.upx(3.0));
    c.draw_series(bins.iter().map(|b| {
        PathElement::new(
            vec![
                (b.x_mean, y.clamp(b.mean - b.err)),
                (b.x_mean, y.clamp(b.mean + b.err)),
            ],
            style,
        )
    }))
    .map_err(de)?;
    c.draw_series(bins.iter().map(|b| {
        PathElement::new(
            vec![(b.x_lo, y.clamp(b.mean)), (b.x_hi, y.clamp(b.mean))],
            colour.stroke_width(sc.upx(1.6)),
        )
    }))
    .map_err(de)?;
    let r = sc.px(7.5);
    c.draw_series(bins.iter().map(|b| {
        EmptyElement::at((b.x_mean, y.clamp(b.mean)))
            + Rectangle::new([(-r, -r), (r, r)], colour.filled())
    }))
    .map_err(de)?
    .label(label.to_string())
    .legend(move |(a, b)| {
        EmptyElement::at((a, b))
            + Rectangle::new([(-r, -r), (r, r)], colour.filled())
            + PathElement::new(vec![(0, -2 * r), (0, 2 * r)], style)
    });
    Ok(())
}

pub(super) fn velocity_distance<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
    inferred: bool,
) -> Result<(), ReportError> {
    let sc = Scale::of(ctx);
    let sample = ctx.sample;
    let points: Vec<(f64, f64, f64, bool)> = sample
        .rows
        .iter()
        .filter(|r| x_of(r, inferred).is_finite() && r.v.is_finite())
        .map(|r| (x_of(r, inferred), r.v, r.v_err, r.outlier))
        .collect();
    let b = binned(ctx, inferred);
    ctx.set_table(table(&b, inferred));
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
    let (lo, hi) = (quantile(&vs, 0.02).min(0.0), quantile(&vs, 0.98).max(0.0));
    let pad = 0.12 * (hi - lo).max(100.0);
    let y = Axis::linear(lo - pad, hi + pad);
    // The lower panel: the binned means on their own scale.
    let span =
        b.v.iter()
            .chain(b.truth.iter())
            .map(|m| m.mean.abs() + if m.err < 1e6 { m.err } else { 0.0 })
            .filter(|v| v.is_finite())
            .fold(100.0f64, f64::max)
            * 1.35;
    // Room above the means for the legend.
    let yb = Axis::linear(-span, 2.2 * span);
    let n_out = points.iter().filter(|p| p.3).count();
    let line = weighted_line(
        &b.v.iter()
            .map(|m| (m.x_mean, m.mean, m.err))
            .collect::<Vec<_>>(),
    );
    let beyond = points
        .iter()
        .filter(|p| !(x.contains(p.0) && y.contains(p.1)))
        .count();
    let what = if b.from_eta {
        "v = η/κ (κ = ∂η/∂v at z_cmb; Gaussian errors, unlike v_pec from log-normal distances, whose mean is biased low)"
    } else {
        "v_pec (no η column: the means carry the bias of velocities from log-normal distances)"
    };
    let (x_name, title, x_desc) = if inferred {
        (
            "inferred distance",
            "Peculiar velocity against inferred distance (biased: see caption)",
            "inferred comoving distance D_{C} (Mpc)",
        )
    } else {
        (
            "redshift distance",
            "Peculiar velocity against redshift distance",
            "redshift distance D_{C}(z_{cmb}) (Mpc)",
        )
    };
    let mut caption = vec![
        rows_line(points.len(), sample, &format!(" with finite {x_name} and v_pec")),
        format!(
            "Squares: error-weighted means of {what} in {} bins of equal numbers of objects in {x_name}, outliers excluded; error bars from the weights (scaled up where the scatter exceeds them). Lower panel: the means alone, and the weighted line through them{}.",
            b.v.len(),
            match line {
                Some(l) => format!(
                    ": slope {} ± {} km/s per Mpc ({}σ from zero)",
                    fixed(l.slope, 3),
                    fixed(l.slope_err, 3),
                    fixed(l.slope / l.slope_err, 1)
                ),
                None => String::new(),
            }
        ),
        format!("Outliers: {n_out}, open green rings. {beyond} points beyond the axis ranges are triangles at the edge. Redshift distances in {}.", super::model_label(ctx)),
    ];
    if inferred {
        caption.push("Against the distance inferred from the distance indicator, velocities trend downwards even when the truth is flat: objects scattered far by their distance error get negative velocities, those scattered near positive ones. Plot against redshift distance to judge a flow.".into());
    }
    let body = super::layout::frame(ctx, root, title, &caption)?;
    let (_, bh) = body.dim_in_pixel();
    let (upper, lower) = body.split_vertically((bh as f64 * 0.6).round() as i32);
    let mut c = chart(&upper, sc, x, y, None, "v_{pec} (km s^{−1})")?;
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
        Some("objects (status ok), v_pec ± error"),
    )?;
    draw_bins(&mut c, sc, &b.v, y, ACCENT, "binned mean ± error")?;
    let labels = vec![
        "objects (status ok), v_pec ± error".to_string(),
        format!("outliers ({n_out}), open markers"),
        "binned mean ± error".to_string(),
    ];
    let occupied: Vec<(f64, f64)> = points.iter().map(|p| (p.0, p.1)).collect();
    let pos = free_corner(&c, sc, &labels, &occupied);
    super::layout::legend(&mut c, sc, pos)?;

    let mut c2 = chart(&lower, sc, x, yb, Some(x_desc), "binned mean v (km s^{−1})")?;
    c2.draw_series(std::iter::once(PathElement::new(
        vec![(x.lo, 0.0), (x.hi, 0.0)],
        INK.stroke_width(sc.upx(1.6)),
    )))
    .map_err(de)?;
    let mut labels = vec!["binned mean ± error".to_string()];
    draw_bins(&mut c2, sc, &b.v, yb, ACCENT, "binned mean ± error")?;
    if let Some(l) = line {
        let style = ACCENT.stroke_width(sc.upx(2.0));
        let label = format!(
            "weighted line: slope {} ± {} km/s/Mpc",
            fixed(l.slope, 3),
            fixed(l.slope_err, 3)
        );
        c2.draw_series(std::iter::once(DashedPathElement::new(
            vec![
                (x.lo, yb.clamp(l.intercept + l.slope * x.lo)),
                (x.hi, yb.clamp(l.intercept + l.slope * x.hi)),
            ],
            sc.px(10.0),
            sc.px(6.0),
            style,
        )))
        .map_err(de)?
        .label(label.clone())
        .legend(move |(a, b)| DashedPathElement::new(vec![(a - 14, b), (a + 14, b)], 6, 4, style));
        labels.push(label);
    }
    if !b.truth.is_empty() {
        let style = TRUTH.stroke_width(sc.upx(2.5));
        let r = sc.px(7.0);
        c2.draw_series(b.truth.iter().map(|m| {
            EmptyElement::at((m.x_mean, yb.clamp(m.mean)))
                + Polygon::new(vec![(0, -r), (r, 0), (0, r), (-r, 0)], style)
        }))
        .map_err(de)?
        .label("mean of true_v_pec (mock truth)")
        .legend(move |(a, b)| {
            EmptyElement::at((a, b)) + Polygon::new(vec![(0, -r), (r, 0), (0, r), (-r, 0)], style)
        });
        labels.push("mean of true_v_pec (mock truth)".into());
    }
    let occupied: Vec<(f64, f64)> =
        b.v.iter()
            .chain(b.truth.iter())
            .flat_map(|m| {
                [
                    (m.x_mean, m.mean),
                    (m.x_mean, m.mean + m.err.min(span)),
                    (m.x_mean, m.mean - m.err.min(span)),
                ]
            })
            .collect();
    let pos = free_corner(&c2, sc, &labels, &occupied);
    super::layout::legend(&mut c2, sc, pos)?;
    Ok(())
}
