//! Figure (c), the sky maps: peculiar velocities on the sky in Galactic or supergalactic
//! coordinates (Mollweide projection), with the bulk-flow and dipole directions marked.

use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

use crate::flow::bulk_flow_report::BulkFlowReport;
use crate::physics::restframe::default_apex;
use crate::report::colour::{diverging, GRID, INK, SKY_BACKGROUND};
use crate::report::data::{galactic_to_supergalactic_deg, supergalactic_to_galactic_deg, Row};
use crate::report::projection::{mollweide, HALF_HEIGHT, HALF_WIDTH};
use crate::report::SkyChoice;

use crate::report::ReportError;

use super::axis::{fixed, nice_ceil, number, Axis};
use super::layout::{frame, halo_text, ring, text, Scale, LABEL_GREY};
use super::stats::{quantile, sorted};
use super::{de, rows_line, Area, Context};

/// A direction to mark on the sky, in the map's frame.
struct Mark {
    lon: f64,
    lat: f64,
    label: String,
}

/// Bulk-flow direction and a description, in the map's frame, from the bulk-flow result; none
/// when its direction is not finite (serde_json writes such a number as null).
fn bulk_flow_mark(report: &BulkFlowReport, sky: SkyChoice) -> Option<Mark> {
    let (l, b) = (report.l, report.b);
    if !(l.is_finite() && b.is_finite()) {
        return None;
    }
    let (amplitude, err) = (report.amplitude, report.amplitude_err);
    let speed = match (amplitude.is_finite(), err.is_finite()) {
        (true, true) => format!("{} ± {} km/s ", fixed(amplitude, 0), fixed(err, 0)),
        (true, false) => format!("{} km/s ", fixed(amplitude, 0)),
        _ => String::new(),
    };
    let (lon, lat) = match sky {
        SkyChoice::Galactic => (l, b),
        SkyChoice::Supergalactic => galactic_to_supergalactic_deg(l, b),
    };
    let names = lon_lat_names(sky);
    Some(Mark {
        lon,
        lat,
        label: format!(
            "bulk flow (from the bulk-flow JSON): {speed}towards {} = {}°, {} = {}°",
            names.0,
            fixed(lon, 1),
            names.1,
            fixed(lat, 1)
        ),
    })
}

fn lon_lat_names(sky: SkyChoice) -> (&'static str, &'static str) {
    match sky {
        SkyChoice::Galactic => ("l", "b"),
        SkyChoice::Supergalactic => ("SGL", "SGB"),
    }
}

fn star(centre: (i32, i32), outer: f64, inner: f64) -> Vec<(i32, i32)> {
    (0..10)
        .map(|k| {
            let r = if k % 2 == 0 { outer } else { inner };
            let a = std::f64::consts::PI * (k as f64 / 5.0 - 0.5);
            (
                centre.0 + (r * a.cos()).round() as i32,
                centre.1 + (r * a.sin()).round() as i32,
            )
        })
        .collect()
}

pub(super) fn draw_star<DB: DrawingBackend>(
    area: &Area<DB>,
    sc: Scale,
    at: (i32, i32),
    size: f64,
) -> Result<(), ReportError> {
    let pts = star(at, size * sc.0, size * 0.42 * sc.0);
    area.draw(&Polygon::new(pts.clone(), RGBColor(255, 200, 30).filled()))
        .map_err(de)?;
    let mut outline = pts;
    outline.push(outline[0]);
    area.draw(&PathElement::new(outline, INK.stroke_width(sc.upx(2.0))))
        .map_err(de)
}

pub(super) fn draw_dipole<DB: DrawingBackend>(
    area: &Area<DB>,
    sc: Scale,
    at: (i32, i32),
    size: f64,
) -> Result<(), ReportError> {
    let r = sc.px(size);
    area.draw(&Circle::new(at, r, WHITE.filled())).map_err(de)?;
    area.draw(&Circle::new(at, r, INK.stroke_width(sc.upx(2.6))))
        .map_err(de)?;
    let k = sc.px(size * 0.62);
    for seg in [
        vec![(at.0 - k, at.1), (at.0 + k, at.1)],
        vec![(at.0, at.1 - k), (at.0, at.1 + k)],
    ] {
        area.draw(&PathElement::new(seg, INK.stroke_width(sc.upx(2.6))))
            .map_err(de)?;
    }
    Ok(())
}

pub(super) fn sky_map<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
    sky: SkyChoice,
) -> Result<(), ReportError> {
    let sc = Scale::of(ctx);
    let sample = ctx.sample;
    let names = lon_lat_names(sky);
    let frame_name = match sky {
        SkyChoice::Galactic => "Galactic",
        SkyChoice::Supergalactic => "supergalactic",
    };
    let mut rows: Vec<&Row> = sample
        .rows
        .iter()
        .filter(|r| r.lon.is_finite() && r.lat.is_finite() && r.v.is_finite())
        .collect();
    // Least precise first, so the best-measured objects are drawn on top.
    rows.sort_by(|a, b| {
        let ea = if a.v_err.is_finite() {
            a.v_err
        } else {
            f64::INFINITY
        };
        let eb = if b.v_err.is_finite() {
            b.v_err
        } else {
            f64::INFINITY
        };
        eb.total_cmp(&ea)
    });
    {
        let (ln, bn) = match sky {
            SkyChoice::Galactic => ("l", "b"),
            SkyChoice::Supergalactic => ("sgl", "sgb"),
        };
        let cols: [&'static str; 5] = [ln, bn, "v_pec", "v_pec_err", "outlier"];
        let mut t = crate::report::tables::DataTable::new(&cols);
        for r in &rows {
            t.push(vec![
                r.lon.into(),
                r.lat.into(),
                r.v.into(),
                r.v_err.into(),
                (if r.outlier { "true" } else { "false" }).into(),
            ]);
        }
        ctx.set_table(t);
    }
    let abs_core = sorted(rows.iter().filter(|r| !r.outlier).map(|r| r.v.abs()));
    let vmax = nice_ceil(quantile(&abs_core, 0.9).max(50.0));
    let n_out = rows.iter().filter(|r| r.outlier).count();
    let clipped = rows
        .iter()
        .filter(|r| !r.outlier && r.v.abs() > vmax)
        .count();
    let bulk = ctx
        .options
        .bulkflow
        .as_ref()
        .and_then(|j| bulk_flow_mark(j, sky));
    let apex = default_apex("cmb");
    let (clon, clat) = match sky {
        SkyChoice::Galactic => (apex.glon_deg, apex.glat_deg),
        SkyChoice::Supergalactic => galactic_to_supergalactic_deg(apex.glon_deg, apex.glat_deg),
    };
    let cmb = Mark {
        lon: clon,
        lat: clat,
        label: format!(
            "CMB dipole ({}): {} = {}°, {} = {}°",
            apex.name,
            names.0,
            fixed(clon, 1),
            names.1,
            fixed(clat, 1)
        ),
    };
    let caption = vec![
        rows_line(rows.len(), sample, " with a sky position and finite v_pec"),
        format!(
            "Colour: v_pec on a diverging scale (Moreland 2009 cool-to-warm, CIELAB-based) from −{v} to +{v} km/s; {clipped} rows beyond ±{v} km/s take the end colours. Outliers: {n_out}, open green rings.",
            v = number(vmax)
        ),
    ];
    let title = format!("Peculiar velocities on the sky, {frame_name} coordinates");
    let body = frame(ctx, root, &title, &caption)?;
    let (bw, bh) = body.dim_in_pixel();
    let (bw, bh) = (bw as f64, bh as f64);
    let bar_w = 210.0 * sc.0;
    let (left, top, legend_h) = (92.0 * sc.0, 22.0 * sc.0, 146.0 * sc.0);
    let avail_w = bw - bar_w - left - 40.0 * sc.0;
    let avail_h = bh - top - legend_h;
    let k = (avail_w / (2.0 * HALF_WIDTH)).min(avail_h / (2.0 * HALF_HEIGHT));
    let cx = left + avail_w / 2.0;
    // Map and legend as one block, centred vertically in the body.
    let free = (avail_h - 2.0 * HALF_HEIGHT * k).max(0.0);
    let cy = top + free / 2.0 + HALF_HEIGHT * k;
    let to_px = |x: f64, y: f64| ((cx + x * k).round() as i32, (cy - y * k).round() as i32);
    let at = |lon: f64, lat: f64| {
        let (x, y) = mollweide(lon, lat, 0.0);
        to_px(x, y)
    };

    // Background, graticule, outline.
    let outline: Vec<(i32, i32)> = (0..=360)
        .map(|i| {
            let t = (i as f64).to_radians();
            to_px(HALF_WIDTH * t.cos(), HALF_HEIGHT * t.sin())
        })
        .collect();
    body.draw(&Polygon::new(outline.clone(), SKY_BACKGROUND.filled()))
        .map_err(de)?;
    let grid = GRID.stroke_width(sc.upx(1.2));
    for lat in [-60.0, -30.0, 0.0, 30.0, 60.0] {
        let line: Vec<(i32, i32)> = (0..=360)
            .map(|i| at(-179.999 + i as f64 * 359.998 / 360.0, lat))
            .collect();
        let style = if lat == 0.0 {
            INK.mix(0.45).stroke_width(sc.upx(1.6))
        } else {
            grid
        };
        body.draw(&PathElement::new(line, style)).map_err(de)?;
    }
    for lon in [60.0, 120.0, 0.0, 240.0, 300.0] {
        let line: Vec<(i32, i32)> = (0..=180).map(|i| at(lon, -90.0 + i as f64)).collect();
        body.draw(&PathElement::new(line, grid)).map_err(de)?;
    }
    // The other frame's plane: the supergalactic plane on a Galactic map and vice versa.
    let (plane_name, plane): (&str, Vec<(f64, f64)>) = match sky {
        SkyChoice::Galactic => (
            "supergalactic plane (SGB = 0°)",
            (0..=720)
                .map(|i| supergalactic_to_galactic_deg(i as f64 * 0.5, 0.0))
                .collect(),
        ),
        SkyChoice::Supergalactic => (
            "Galactic plane (b = 0°)",
            (0..=720)
                .map(|i| galactic_to_supergalactic_deg(i as f64 * 0.5, 0.0))
                .collect(),
        ),
    };
    let mut piece: Vec<(i32, i32)> = Vec::new();
    let mut last_x: Option<f64> = None;
    let plane_style = RGBColor(110, 110, 110).stroke_width(sc.upx(2.0));
    let mut pieces = Vec::new();
    for (lon, lat) in plane {
        let (x, y) = mollweide(lon, lat, 0.0);
        if last_x.is_some_and(|lx| (lx - x).abs() > HALF_WIDTH) {
            pieces.push(std::mem::take(&mut piece));
        }
        last_x = Some(x);
        piece.push(to_px(x, y));
    }
    pieces.push(piece);
    for p in pieces.into_iter().filter(|p| p.len() > 1) {
        body.draw(&DashedPathElement::new(
            p,
            sc.px(9.0),
            sc.px(7.0),
            plane_style,
        ))
        .map_err(de)?;
    }
    body.draw(&PathElement::new(outline, INK.stroke_width(sc.upx(2.0))))
        .map_err(de)?;
    let label_font = sc.font(19.0).color(&LABEL_GREY);
    for lon in [0.0, 60.0, 120.0, 240.0, 300.0] {
        let p = at(lon, 0.0);
        text(
            &body,
            &format!("{}°", lon as i32),
            (p.0 + sc.px(4.0), p.1 + sc.px(5.0)),
            &label_font,
            (HPos::Left, VPos::Top),
        )?;
    }
    let west = at(179.999, 0.0);
    let east = at(180.001, 0.0);
    text(
        &body,
        "180°",
        (west.0 - sc.px(8.0), west.1),
        &label_font,
        (HPos::Right, VPos::Center),
    )?;
    text(
        &body,
        "180°",
        (east.0 + sc.px(8.0), east.1),
        &label_font,
        (HPos::Left, VPos::Center),
    )?;
    for lat in [-60.0, -30.0, 30.0, 60.0] {
        let p = at(179.999, lat);
        let s = if lat > 0.0 {
            format!("+{}°", lat as i32)
        } else {
            format!("−{}°", (-lat) as i32)
        };
        text(
            &body,
            &s,
            (p.0 - sc.px(8.0), p.1),
            &label_font,
            (HPos::Right, VPos::Center),
        )?;
    }

    // The data.
    let dot = sc.px(4.6);
    for r in rows.iter().filter(|r| !r.outlier) {
        let c = diverging(0.5 + 0.5 * r.v / vmax);
        body.draw(&Circle::new(at(r.lon, r.lat), dot, c.mix(0.92).filled()))
            .map_err(de)?;
    }
    let rs = ring(sc);
    for r in rows.iter().filter(|r| r.outlier) {
        body.draw(&Circle::new(at(r.lon, r.lat), sc.px(7.5), rs))
            .map_err(de)?;
    }
    // Directions.
    draw_dipole(&body, sc, at(cmb.lon, cmb.lat), 13.0)?;
    let mark_font = sc.bold(19.0);
    let p = at(cmb.lon, cmb.lat);
    halo_text(
        &body,
        "CMB dipole",
        (p.0 + sc.px(18.0), p.1 - sc.px(12.0)),
        &mark_font,
        sc,
    )?;
    if let Some(b) = &bulk {
        let p = at(b.lon, b.lat);
        draw_star(&body, sc, p, 21.0)?;
        halo_text(
            &body,
            "bulk flow",
            (p.0 + sc.px(20.0), p.1 + sc.px(26.0)),
            &mark_font,
            sc,
        )?;
    }

    // Legend below the map.
    let lx = left as i32;
    let mut ly = (cy + HALF_HEIGHT * k + 34.0 * sc.0) as i32;
    let lf = sc.font(20.0);
    let step = sc.px(31.0);
    body.draw(&Circle::new(
        (lx + sc.px(10.0), ly),
        dot + 1,
        diverging(0.85).filled(),
    ))
    .map_err(de)?;
    body.draw(&Circle::new(
        (lx + sc.px(24.0), ly),
        dot + 1,
        diverging(0.15).filled(),
    ))
    .map_err(de)?;
    text(
        &body,
        &format!(
            "rows with status ok, coloured by v_pec ({})",
            rows.len() - n_out
        ),
        (lx + sc.px(42.0), ly),
        &lf,
        (HPos::Left, VPos::Center),
    )?;
    let ox = lx + sc.px(640.0);
    body.draw(&Circle::new((ox + sc.px(10.0), ly), sc.px(7.5), rs))
        .map_err(de)?;
    text(
        &body,
        &format!("outliers ({n_out})"),
        (ox + sc.px(30.0), ly),
        &lf,
        (HPos::Left, VPos::Center),
    )?;
    ly += step;
    draw_dipole(&body, sc, (lx + sc.px(17.0), ly), 10.0)?;
    text(
        &body,
        &cmb.label,
        (lx + sc.px(42.0), ly),
        &lf,
        (HPos::Left, VPos::Center),
    )?;
    ly += step;
    match &bulk {
        Some(b) => {
            draw_star(&body, sc, (lx + sc.px(17.0), ly), 14.0)?;
            text(
                &body,
                &b.label,
                (lx + sc.px(42.0), ly),
                &lf,
                (HPos::Left, VPos::Center),
            )?;
        }
        None => {
            text(
                &body,
                "bulk flow not marked: no bulk-flow JSON was given",
                (lx + sc.px(42.0), ly),
                &lf,
                (HPos::Left, VPos::Center),
            )?;
        }
    }
    ly += step;
    body.draw(&DashedPathElement::new(
        vec![(lx, ly), (lx + sc.px(34.0), ly)],
        sc.px(9.0),
        sc.px(5.0),
        plane_style,
    ))
    .map_err(de)?;
    text(
        &body,
        &format!(
            "{plane_name}. Axes: {frame_name} longitude {} (deg), increasing to the left from {} = 0° at the centre; latitude {} (deg). Mollweide equal-area projection.",
            names.0, names.0, names.1
        ),
        (lx + sc.px(42.0), ly),
        &lf,
        (HPos::Left, VPos::Center),
    )?;

    // Colour bar.
    let bx = (bw - bar_w + 46.0 * sc.0) as i32;
    let bar_top = (cy - HALF_HEIGHT * k + 50.0 * sc.0) as i32;
    let bar_bottom = (cy + HALF_HEIGHT * k - 10.0 * sc.0) as i32;
    let bar_wd = sc.px(34.0);
    super::typeset::draw(
        &body,
        "v_{pec} (km s^{−1})",
        (bx - sc.px(10.0), bar_top - sc.px(40.0)),
        &sc.font(23.0),
        HPos::Left,
        false,
    )?;
    let span = (bar_bottom - bar_top).max(10);
    for i in 0..span {
        let t = 1.0 - i as f64 / (span - 1) as f64;
        body.draw(&Rectangle::new(
            [(bx, bar_top + i), (bx + bar_wd, bar_top + i + 1)],
            diverging(t).filled(),
        ))
        .map_err(de)?;
    }
    // End triangles: values beyond the range take the end colours.
    let tri_h = sc.px(18.0);
    body.draw(&Polygon::new(
        vec![
            (bx, bar_top),
            (bx + bar_wd, bar_top),
            (bx + bar_wd / 2, bar_top - tri_h),
        ],
        diverging(1.0).filled(),
    ))
    .map_err(de)?;
    body.draw(&Polygon::new(
        vec![
            (bx, bar_bottom),
            (bx + bar_wd, bar_bottom),
            (bx + bar_wd / 2, bar_bottom + tri_h),
        ],
        diverging(0.0).filled(),
    ))
    .map_err(de)?;
    body.draw(&PathElement::new(
        vec![
            (bx, bar_top),
            (bx + bar_wd / 2, bar_top - tri_h),
            (bx + bar_wd, bar_top),
            (bx + bar_wd, bar_bottom),
            (bx + bar_wd / 2, bar_bottom + tri_h),
            (bx, bar_bottom),
            (bx, bar_top),
        ],
        INK.stroke_width(sc.upx(1.4)),
    ))
    .map_err(de)?;
    let axis = Axis::linear(-vmax, vmax);
    for v in axis.ticks(8) {
        let yy = bar_top + ((1.0 - (v + vmax) / (2.0 * vmax)) * (span - 1) as f64).round() as i32;
        body.draw(&PathElement::new(
            vec![(bx + bar_wd, yy), (bx + bar_wd + sc.px(8.0), yy)],
            INK.stroke_width(sc.upx(1.4)),
        ))
        .map_err(de)?;
        let label = if v > 0.0 {
            format!("+{}", number(v))
        } else {
            number(v)
        };
        text(
            &body,
            &label,
            (bx + bar_wd + sc.px(13.0), yy),
            &sc.font(20.0),
            (HPos::Left, VPos::Center),
        )?;
    }
    Ok(())
}
