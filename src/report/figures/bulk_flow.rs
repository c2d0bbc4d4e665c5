//! The bulk-flow figure: the measured Galactic components with their errors against the ΛCDM
//! expectation for the sample's own window (both from the bulk-flow result), and, when the
//! sample allows, the components fitted to subsamples limited in redshift distance — the same
//! maximum-likelihood fit (Kaiser 1988, in `physics::dipole_likelihood`) with the result's σ_*.

use plotters::prelude::*;

use crate::physics::dipole_likelihood::{fit_bulk_flow, FlowData, SigmaStar};
use crate::report::cell_means::unit_vector;
use crate::report::colour::{ACCENT, INK, POINT, TRUTH};
use crate::report::tables::{DataTable, Value};

use crate::report::ReportError;

use super::axis::{fixed, Axis};
use super::layout::{chart, free_corner, legend, Scale};
use super::{de, Area, Context};

/// Columns of `bulk_flow.data.csv`.
pub(crate) const COLUMNS: [&str; 7] = [
    "sample",
    "depth_max",
    "n",
    "component",
    "value",
    "error",
    "lcdm_rms",
];

/// Smallest subsample fitted for the depth panel.
const MIN_OBJECTS: usize = 150;

struct DepthFit {
    depth: f64,
    n: usize,
    v: [f64; 3],
    err: [f64; 3],
}

fn depth_fits(ctx: &Context<'_>, sigma_star: f64) -> Vec<DepthFit> {
    let rows: Vec<_> = ctx
        .sample
        .rows
        .iter()
        .filter(|r| !r.outlier && r.depth.is_finite() && r.glon.is_finite() && r.glat.is_finite())
        .filter(|r| r.eta.is_finite() && r.eta_err > 0.0 && r.kappa > 0.0)
        .collect();
    let mut depths: Vec<f64> = rows.iter().map(|r| r.depth).collect();
    depths.sort_by(f64::total_cmp);
    if depths.len() < 2 * MIN_OBJECTS {
        return Vec::new();
    }
    let mut out = Vec::new();
    for q in [0.2, 0.35, 0.5, 0.65, 0.8, 1.0] {
        let limit = depths[((depths.len() - 1) as f64 * q).round() as usize];
        let sub: Vec<_> = rows.iter().filter(|r| r.depth <= limit).collect();
        if sub.len() < MIN_OBJECTS {
            continue;
        }
        let dirs: Vec<[f64; 3]> = sub.iter().map(|r| unit_vector(r.glon, r.glat)).collect();
        let values: Vec<f64> = sub.iter().map(|r| r.eta).collect();
        let errors: Vec<f64> = sub.iter().map(|r| r.eta_err).collect();
        let kappa: Vec<f64> = sub.iter().map(|r| r.kappa).collect();
        let data = FlowData {
            directions: &dirs,
            values: &values,
            errors: &errors,
            kappa: &kappa,
        };
        if let Ok(fit) = fit_bulk_flow(&data, SigmaStar::Fixed(sigma_star.max(0.0))) {
            out.push(DepthFit {
                depth: limit,
                n: sub.len(),
                v: fit.v,
                err: [0, 1, 2].map(|i| fit.cov[i][i].max(0.0).sqrt()),
            });
        }
    }
    out
}

pub(super) fn bulk_flow<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
) -> Result<(), ReportError> {
    let sc = Scale::of(ctx);
    let Some(report) = ctx.options.bulkflow.as_ref() else {
        return Err(ReportError::Drawing("no bulk-flow result".into()));
    };
    let err = [0, 1, 2].map(|i| report.galactic.cov[i][i].max(0.0).sqrt());
    let rms = report.lcdm.as_ref().map(|l| l.lcdm_rms);
    let fits = depth_fits(ctx, report.fit.sigma_star);
    let names = ["x", "y", "z"];
    let mut t = DataTable::new(&COLUMNS);
    for i in 0..3 {
        t.push(vec![
            Value::from("bulk-flow result"),
            f64::NAN.into(),
            report.fit.n_used.into(),
            Value::from(names[i]),
            report.galactic.v[i].into(),
            err[i].into(),
            rms.map_or(f64::NAN, |r| r[i]).into(),
        ]);
    }
    for f in &fits {
        for (i, name) in names.iter().enumerate() {
            t.push(vec![
                Value::from("depth-limited"),
                f.depth.into(),
                f.n.into(),
                Value::from(*name),
                f.v[i].into(),
                f.err[i].into(),
                f64::NAN.into(),
            ]);
        }
    }
    ctx.set_table(t);

    let mut caption = vec![format!(
        "Galactic Cartesian components (x → l = 0°, y → l = 90°, z → b = 90°) of the bulk flow fitted to {} objects in {} space (σ_* = {} km/s{}).",
        report.fit.n_used,
        report.fit.quantity.name(),
        fixed(report.fit.sigma_star, 0),
        if report.fit.sigma_star_fitted { ", fitted" } else { ", fixed" }
    )];
    match &report.lcdm {
        Some(l) => caption.push(format!(
            "Grey: the ΛCDM expectation for the sample's own window, ±1σ dark and ±2σ light (rms {}, {}, {} km/s; window: {}; P(k): {}; f = {}, σ8 = {}). χ² of the flow against ΛCDM: {} for {} degrees of freedom, p = {}.",
            fixed(l.lcdm_rms[0], 0),
            fixed(l.lcdm_rms[1], 0),
            fixed(l.lcdm_rms[2], 0),
            l.window,
            l.power_spectrum,
            fixed(l.growth_rate, 2),
            fixed(l.sigma8, 2),
            fixed(l.chi2, 2),
            l.dof,
            fixed(l.probability, 3)
        )),
        None => caption.push("No ΛCDM expectation in the bulk-flow result: no band is drawn.".into()),
    }
    if fits.is_empty() {
        caption.push(format!(
            "Too few objects for flows limited in depth (at least {} per subsample, from {}).",
            MIN_OBJECTS,
            2 * MIN_OBJECTS
        ));
    } else {
        caption.push(format!(
            "Lower panel: the same fit (σ_* fixed at the result's) to the objects within each redshift distance D_C(z_cmb), outliers excluded; the subsamples are nested, so their errors are correlated. Their ΛCDM expectation grows towards small depths and is not drawn. Distances in {}.",
            super::model_label(ctx)
        ));
    }
    let body = super::layout::frame(
        ctx,
        root,
        "Bulk flow: components against the ΛCDM expectation",
        &caption,
    )?;
    let (_, bh) = body.dim_in_pixel();
    let (upper, lower) = if fits.is_empty() {
        (body.clone(), None)
    } else {
        let (a, b) = body.split_vertically((bh as f64 * 0.5).round() as i32);
        (a, Some(b))
    };
    let mut span = 100.0f64;
    for i in 0..3 {
        span = span.max(report.galactic.v[i].abs() + 1.5 * err[i]);
        if let Some(r) = rms {
            span = span.max(2.2 * r[i]);
        }
    }
    let span = span * 1.15;
    let x = Axis::linear(0.4, 3.6);
    let y = Axis::linear(-span, span);
    let mut c = chart(&upper, sc, x, y, None, "B_{i} (km s^{−1})")?;
    c.draw_series(std::iter::once(PathElement::new(
        vec![(x.lo, 0.0), (x.hi, 0.0)],
        INK.stroke_width(sc.upx(1.4)),
    )))
    .map_err(de)?;
    if let Some(r) = rms {
        for (k, alpha) in [(2.0, 0.18), (1.0, 0.35)] {
            c.draw_series((0..3).map(|i| {
                let xc = i as f64 + 1.0;
                Rectangle::new(
                    [(xc - 0.3, -k * r[i]), (xc + 0.3, k * r[i])],
                    RGBColor(120, 120, 120).mix(alpha).filled(),
                )
            }))
            .map_err(de)?;
        }
    }
    let style = ACCENT.stroke_width(sc.upx(3.0));
    c.draw_series((0..3).map(|i| {
        let xc = i as f64 + 1.0;
        PathElement::new(
            vec![
                (xc, y.clamp(report.galactic.v[i] - err[i])),
                (xc, y.clamp(report.galactic.v[i] + err[i])),
            ],
            style,
        )
    }))
    .map_err(de)?;
    let r = sc.px(8.0);
    c.draw_series((0..3).map(|i| {
        EmptyElement::at((i as f64 + 1.0, y.clamp(report.galactic.v[i])))
            + Circle::new((0, 0), r, ACCENT.filled())
    }))
    .map_err(de)?
    .label("measured component ± error")
    .legend(move |(a, b)| Circle::new((a, b), r, ACCENT.filled()));
    let mut labels = vec!["measured component ± error".to_string()];
    if rms.is_some() {
        c.draw_series(std::iter::empty::<Rectangle<(f64, f64)>>())
            .map_err(de)?
            .label("ΛCDM expectation, ±1σ and ±2σ")
            .legend(|(a, b)| {
                Rectangle::new(
                    [(a - 10, b - 8), (a + 10, b + 8)],
                    RGBColor(120, 120, 120).mix(0.35).filled(),
                )
            });
        labels.push("ΛCDM expectation, ±1σ and ±2σ".into());
    }
    // Component names under the points.
    let font = sc.font(24.0);
    for (i, n) in ["B_{x}", "B_{y}", "B_{z}"].iter().enumerate() {
        let (px, py) = c.backend_coord(&(i as f64 + 1.0, y.lo));
        let (bx, by) = upper.get_base_pixel();
        super::typeset::draw(
            &upper,
            n,
            (px - bx, py - by - sc.px(22.0)),
            &font,
            plotters::style::text_anchor::HPos::Center,
            false,
        )?;
    }
    let occupied: Vec<(f64, f64)> = (0..3)
        .flat_map(|i| {
            let xc = i as f64 + 1.0;
            let h = rms.map_or(0.0, |r| 2.0 * r[i]);
            [(xc, report.galactic.v[i]), (xc, h), (xc, -h), (xc, 0.0)]
        })
        .collect();
    let pos = free_corner(&c, sc, &labels, &occupied);
    legend(&mut c, sc, pos)?;

    if let Some(lower) = lower {
        let dmax = fits.iter().map(|f| f.depth).fold(0.0, f64::max) * 1.06;
        let dmin = fits.iter().map(|f| f.depth).fold(f64::INFINITY, f64::min) * 0.9;
        let mut s2 = 100.0f64;
        for f in &fits {
            for i in 0..3 {
                s2 = s2.max(f.v[i].abs() + f.err[i]);
            }
        }
        let y2 = Axis::linear(-s2 * 1.2, s2 * 1.2);
        let x2 = Axis::linear(dmin.min(dmax * 0.5), dmax);
        let mut c2 = chart(
            &lower,
            sc,
            x2,
            y2,
            Some("depth limit D_{C}(z_{cmb}) (Mpc)"),
            "B_{i} (km s^{−1})",
        )?;
        c2.draw_series(std::iter::once(PathElement::new(
            vec![(x2.lo, 0.0), (x2.hi, 0.0)],
            INK.stroke_width(sc.upx(1.4)),
        )))
        .map_err(de)?;
        let colours = [POINT, ACCENT, TRUTH];
        let shift = 0.008 * (x2.hi - x2.lo);
        let mut labels = Vec::new();
        let mut occupied = Vec::new();
        for i in 0..3 {
            let colour = colours[i];
            let dx = (i as f64 - 1.0) * shift;
            c2.draw_series(fits.iter().map(|f| {
                PathElement::new(
                    vec![
                        (f.depth + dx, y2.clamp(f.v[i] - f.err[i])),
                        (f.depth + dx, y2.clamp(f.v[i] + f.err[i])),
                    ],
                    colour.stroke_width(sc.upx(2.0)),
                )
            }))
            .map_err(de)?;
            c2.draw_series(std::iter::once(PathElement::new(
                fits.iter()
                    .map(|f| (f.depth + dx, y2.clamp(f.v[i])))
                    .collect::<Vec<_>>(),
                colour.stroke_width(sc.upx(1.5)),
            )))
            .map_err(de)?;
            let label = format!("{} component", names[i]);
            c2.draw_series(fits.iter().map(|f| {
                Circle::new(
                    (f.depth + dx, y2.clamp(f.v[i])),
                    sc.px(5.5),
                    colour.filled(),
                )
            }))
            .map_err(de)?
            .label(label.clone())
            .legend(move |(a, b)| Circle::new((a, b), 6, colour.filled()));
            labels.push(label);
            for f in &fits {
                occupied.extend([
                    (f.depth + dx, f.v[i]),
                    (f.depth + dx, f.v[i] + f.err[i]),
                    (f.depth + dx, f.v[i] - f.err[i]),
                ]);
            }
        }
        let pos = free_corner(&c2, sc, &labels, &occupied);
        legend(&mut c2, sc, pos)?;
    }
    Ok(())
}
