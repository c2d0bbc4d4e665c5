//! Figure (a), the Hubble diagram: distance indicator against CMB-frame redshift, the model
//! curve, and the residuals from it.

use plotters::element::DashedPathElement;
use plotters::prelude::*;

use crate::physics::redshift::doppler_redshift;
use crate::report::colour::{ACCENT, INK};

use crate::report::data::Row;

use crate::report::ReportError;

use super::axis::{clip_curve, number, Axis};
use super::layout::{chart, frame, free_corner, legend, scatter, Scale};
use super::stats::{quantile, sorted};
use super::{de, model_label, rows_line, Area, Context};

/// Columns of `hubble_diagram.data.csv`: rows `model` (the model curve: z, model value) and
/// `binned_residual` (error-weighted mean residual in bins of ln z: z at the mean, residual,
/// error, z at the bin's lower edge, objects).
pub(crate) const COLUMNS: [&str; 7] = [
    "kind",
    "z_cmb",
    "model",
    "residual",
    "residual_err",
    "z_lo",
    "n",
];

/// The peculiar velocity whose residual curves the Hubble diagram shows, km/s.
const GUIDE_VELOCITY: f64 = 500.0;

pub(super) fn hubble<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
) -> Result<(), ReportError> {
    let sc = Scale::of(ctx);
    let sample = ctx.sample;
    let cosmo = ctx.cosmology;
    let use_mu = sample.has_mu && sample.rows.iter().any(|r| r.mu.is_finite());
    let z_max_model = cosmo.z_max();
    let value = |r: &Row| if use_mu { r.mu } else { r.d };
    let model = |z: f64| -> f64 {
        if use_mu {
            cosmo.distance_modulus(z).unwrap_or(f64::NAN)
        } else {
            cosmo.comoving_distance(z).unwrap_or(f64::NAN)
        }
    };
    let points: Vec<(f64, f64, f64, bool, f64)> = sample
        .rows
        .iter()
        .filter(|r| r.z.is_finite() && r.z > 0.0 && r.z < z_max_model && value(r).is_finite())
        .filter(|r| use_mu || r.d > 0.0)
        .map(|r| {
            let m = model(r.z);
            let resid = if use_mu { r.mu - m } else { r.d / m - 1.0 };
            let err = if use_mu { r.mu_err } else { f64::NAN };
            (r.z, value(r), err, r.outlier, resid)
        })
        .collect();
    let zs = sorted(points.iter().map(|p| p.0));
    let (zlo, zhi) = if zs.is_empty() {
        (0.005, 0.1)
    } else {
        (zs[0] / 1.12, zs[zs.len() - 1] * 1.12)
    };
    let x = Axis::log(zlo, zhi.min(z_max_model));
    let curve: Vec<(f64, f64)> = (0..=300)
        .map(|i| {
            let z = 10f64.powf(x.t(x.lo) + (x.t(x.hi) - x.t(x.lo)) * i as f64 / 300.0);
            (z, model(z))
        })
        .filter(|p| p.1.is_finite())
        .collect();
    // Upper panel range: robust over the points, always containing the model.
    let core = sorted(points.iter().filter(|p| !p.3).map(|p| p.1));
    let all = if core.is_empty() {
        sorted(points.iter().map(|p| p.1))
    } else {
        core
    };
    let cy = sorted(curve.iter().map(|p| p.1));
    let lo = quantile(&all, 0.002).min(quantile(&cy, 0.0));
    let hi = quantile(&all, 0.998).max(quantile(&cy, 1.0));
    let y = if use_mu {
        Axis::linear(lo - 0.4, hi + 0.4)
    } else {
        Axis::log(lo / 1.3, hi * 1.3)
    };
    // Residual range: symmetric, robust.
    let res = sorted(points.iter().filter(|p| !p.3).map(|p| p.4));
    let res = if res.is_empty() {
        sorted(points.iter().map(|p| p.4))
    } else {
        res
    };
    let a = quantile(&res, 0.005)
        .abs()
        .max(quantile(&res, 0.995).abs())
        .max(if use_mu { 0.3 } else { 0.05 })
        * 1.15;
    let a = if a.is_finite() { a } else { 1.0 };
    let yr = Axis::linear(-a, a);

    let n_out = points.iter().filter(|p| p.3).count();
    let needs = if use_mu {
        " with finite μ and z_cmb > 0"
    } else {
        " with D_C > 0 and z_cmb > 0"
    };
    let beyond = points.iter().filter(|p| !y.contains(p.1)).count()
        + points.iter().filter(|p| !yr.contains(p.4)).count();
    let mut caption = vec![rows_line(points.len(), sample, needs)];
    caption.push(format!(
        "Model: {} ({}). Dashed: the residual of a peculiar velocity of ±{} km/s. Outliers: {n_out}, open green rings. Points beyond the axis ranges (top and bottom panels together: {beyond}) are triangles at the edge.",
        if use_mu { "μ(z_cmb) from D_L" } else { "D_C(z_cmb)" },
        model_label(ctx),
        number(GUIDE_VELOCITY)
    ));
    if use_mu && sample.mu_column != "mu" {
        caption.push(format!(
            "μ read from the column {} (the distance modulus in the run's recorded column mapping).",
            sample.mu_column
        ));
    }
    if !use_mu {
        caption.push("The table has no distance-modulus column (neither mu nor one the run's record maps to μ): comoving distances D_C implied by the distance indicator are shown instead.".into());
    }
    caption.push(format!(
        "Model cosmology: {}.",
        ctx.options.cosmology_source
    ));
    // The numbers plotted: the model curve and the binned residuals.
    let mut table = crate::report::tables::DataTable::new(&COLUMNS);
    for &(z, m) in &curve {
        table.push(vec![
            "model".into(),
            z.into(),
            m.into(),
            f64::NAN.into(),
            f64::NAN.into(),
            f64::NAN.into(),
            0usize.into(),
        ]);
    }
    let zs_core: Vec<f64> = points.iter().filter(|p| !p.3).map(|p| p.0.ln()).collect();
    let edges = crate::report::binned::equal_count_edges(&zs_core, 10, 20);
    let resid_pts: Vec<(f64, f64, f64)> = points
        .iter()
        .filter(|p| !p.3)
        .map(|p| (p.0.ln(), p.4, if use_mu && p.2 > 0.0 { p.2 } else { 1.0 }))
        .collect();
    let resid_bins = crate::report::binned::weighted_bins(&resid_pts, &edges);
    for b in &resid_bins {
        table.push(vec![
            "binned_residual".into(),
            b.x_mean.exp().into(),
            f64::NAN.into(),
            b.mean.into(),
            b.err.into(),
            b.x_lo.exp().into(),
            b.n.into(),
        ]);
    }
    ctx.set_table(table);
    let title = if use_mu {
        "Hubble diagram: distance modulus against CMB-frame redshift"
    } else {
        "Hubble diagram: comoving distance against CMB-frame redshift"
    };
    let body = frame(ctx, root, title, &caption)?;
    let (_, bh) = body.dim_in_pixel();
    let (upper, lower) = body.split_vertically((bh as f64 * 0.66).round() as i32);

    let y_desc = if use_mu {
        "distance modulus μ (mag)"
    } else {
        "comoving distance D_{C} (Mpc)"
    };
    let mut top = chart(&upper, sc, x, y, None, y_desc)?;
    let pts: Vec<(f64, f64, f64, bool)> = points.iter().map(|p| (p.0, p.1, p.2, p.3)).collect();
    let label = if use_mu {
        "rows with status ok, μ ± σ_μ"
    } else {
        "rows with status ok"
    };
    scatter(&mut top, sc, &pts, x, y, Some(label))?;
    top.draw_series(std::iter::once(PathElement::new(
        curve.clone(),
        INK.stroke_width(sc.upx(3.0)),
    )))
    .map_err(de)?
    .label(format!("model: {}", model_label(ctx)))
    .legend(move |(a, b)| {
        PathElement::new(
            vec![(a - 12, b), (a + 12, b)],
            INK.stroke_width(sc.upx(3.0)),
        )
    });
    let occupied: Vec<(f64, f64)> = pts
        .iter()
        .map(|p| (p.0, p.1))
        .chain(curve.iter().copied())
        .collect();
    let labels = vec![
        label.to_string(),
        format!("outliers ({n_out}), open markers"),
        format!("model: {}", model_label(ctx)),
    ];
    let pos = free_corner(&top, sc, &labels, &occupied);
    legend(&mut top, sc, pos)?;

    let r_desc = if use_mu {
        "μ − μ_{model} (mag)"
    } else {
        "D_{C} / D_{C,model} − 1"
    };
    let mut bottom = chart(
        &lower,
        sc,
        x,
        yr,
        Some("CMB-frame redshift z_{cmb} (log scale)"),
        r_desc,
    )?;
    bottom
        .draw_series(std::iter::once(PathElement::new(
            vec![(x.lo, 0.0), (x.hi, 0.0)],
            INK.stroke_width(sc.upx(2.0)),
        )))
        .map_err(de)?;
    let rpts: Vec<(f64, f64, f64, bool)> = points.iter().map(|p| (p.0, p.4, p.2, p.3)).collect();
    scatter(&mut bottom, sc, &rpts, x, yr, None)?;
    // Guide curves: the residual a peculiar velocity of ±GUIDE_VELOCITY gives.
    let mut guides: Vec<(f64, f64)> = Vec::new();
    for v in [GUIDE_VELOCITY, -GUIDE_VELOCITY] {
        let Ok(zp) = doppler_redshift(v) else {
            continue;
        };
        let g: Vec<(f64, f64)> = curve
            .iter()
            .map(|&(z, m)| {
                let zc = (1.0 + z) / (1.0 + zp.value()) - 1.0;
                let r = if use_mu {
                    match (
                        cosmo.transverse_comoving_distance(zc),
                        cosmo.transverse_comoving_distance(z),
                    ) {
                        (Ok(a), Ok(b)) if a > 0.0 && b > 0.0 => 5.0 * (a / b).log10(),
                        _ => f64::NAN,
                    }
                } else {
                    cosmo
                        .comoving_distance(zc)
                        .map_or(f64::NAN, |d| d / m - 1.0)
                };
                (z, r)
            })
            .collect();
        guides.extend(g.iter().copied().filter(|p| yr.contains(p.1)));
        for piece in clip_curve(&g, &yr) {
            bottom
                .draw_series(std::iter::once(DashedPathElement::new(
                    piece,
                    sc.px(10.0),
                    sc.px(7.0),
                    INK.mix(0.8).stroke_width(sc.upx(2.0)),
                )))
                .map_err(de)?;
        }
    }
    let guide = INK.mix(0.8).stroke_width(sc.upx(2.0));
    bottom
        .draw_series(std::iter::empty::<PathElement<(f64, f64)>>())
        .map_err(de)?
        .label(format!("v_pec = ±{} km/s", number(GUIDE_VELOCITY)))
        .legend(move |(a, b)| DashedPathElement::new(vec![(a - 14, b), (a + 14, b)], 6, 4, guide));
    // Error-weighted mean residuals in bins of ln z.
    let r = sc.px(7.0);
    let bar = ACCENT.stroke_width(sc.upx(3.0));
    bottom
        .draw_series(resid_bins.iter().map(|b| {
            PathElement::new(
                vec![
                    (b.x_mean.exp(), yr.clamp(b.mean - b.err)),
                    (b.x_mean.exp(), yr.clamp(b.mean + b.err)),
                ],
                bar,
            )
        }))
        .map_err(de)?;
    let mut labels = vec![format!("v_pec = ±{} km/s", number(GUIDE_VELOCITY))];
    if !resid_bins.is_empty() {
        bottom
            .draw_series(resid_bins.iter().map(|b| {
                EmptyElement::at((b.x_mean.exp(), yr.clamp(b.mean)))
                    + Rectangle::new([(-r, -r), (r, r)], ACCENT.filled())
            }))
            .map_err(de)?
            .label("binned mean residual ± error")
            .legend(move |(a, b)| {
                Rectangle::new([(a - r, b - r), (a + r, b + r)], ACCENT.filled())
            });
        labels.push("binned mean residual ± error".into());
    }
    let mut occupied: Vec<(f64, f64)> = rpts.iter().map(|p| (p.0, p.1)).collect();
    occupied.extend(guides.iter().copied());
    let pos = free_corner(&bottom, sc, &labels, &occupied);
    legend(&mut bottom, sc, pos)?;
    Ok(())
}
