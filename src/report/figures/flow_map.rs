//! The flow map: error-weighted mean velocity in equal-area sky cells
//! ([`crate::report::sky_cells`]) for all depths and for redshift shells chosen from the data,
//! as Mollweide panels, with the dipole fitted to each panel's cells, the maximum-likelihood
//! bulk-flow direction (from the bulk-flow result) and the CMB dipole. Single velocities are
//! noise-dominated (a 20 % distance error is 3 000 km/s at 15 000 km/s); cell means are not.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

use crate::physics::restframe::default_apex;
use crate::report::cell_means::{
    cell_means, fit_dipole, shell_count, shells, CellMean, Dipole, MapObject, Shell,
};
use crate::report::colour::{diverging, GRID, INK, SKY_BACKGROUND};
use crate::report::data::galactic_to_supergalactic_deg;
use crate::report::projection::{auxiliary_angle, HALF_HEIGHT, HALF_WIDTH};
use crate::report::sky_cells::SkyGrid;
use crate::report::tables::DataTable;
use crate::report::{ReportError, SkyChoice};

use super::axis::{fixed, nice_ceil, number, Axis};
use super::layout::{text, Scale, LABEL_GREY};
use super::sky_map::{draw_dipole, draw_star};
use super::stats::{quantile, sorted};
use super::{de, rows_line, Area, Context};

/// Columns of `flow_map_galactic.data.csv`; the supergalactic map names its centre columns
/// `sgl`, `sgb`.
pub(crate) const COLUMNS_GALACTIC: [&str; 16] = [
    "shell",
    "d_lo",
    "d_hi",
    "cell",
    "l",
    "b",
    "solid_angle_sr",
    "n",
    "eta_mean",
    "eta_mean_err",
    "v_mean",
    "v_mean_err",
    "lon_lo",
    "lon_width",
    "lat_lo",
    "lat_hi",
];
const COLUMNS_SUPERGALACTIC: [&str; 16] = [
    "shell",
    "d_lo",
    "d_hi",
    "cell",
    "sgl",
    "sgb",
    "solid_angle_sr",
    "n",
    "eta_mean",
    "eta_mean_err",
    "v_mean",
    "v_mean_err",
    "lon_lo",
    "lon_width",
    "lat_lo",
    "lat_hi",
];

/// Everything the panels show.
pub(crate) struct MapData {
    pub grid: SkyGrid,
    pub shells: Vec<Shell>,
    pub cells: Vec<CellMean>,
    pub dipoles: Vec<Option<Dipole>>,
}

pub(crate) fn map_data(ctx: &Context<'_>) -> MapData {
    let objects: Vec<MapObject> = ctx
        .sample
        .rows
        .iter()
        .filter(|r| !r.outlier && r.lon.is_finite() && r.lat.is_finite())
        .map(|r| MapObject {
            lon: r.lon,
            lat: r.lat,
            depth: r.depth,
            eta: r.eta,
            eta_err: r.eta_err,
            kappa: r.kappa,
        })
        .filter(|o| o.eta.is_finite() && o.depth.is_finite())
        .collect();
    let count = shell_count(objects.len());
    let shells = shells(&objects, count);
    let per_shell = if count > 1 {
        objects.len() / count
    } else {
        objects.len()
    };
    let grid = SkyGrid::near((per_shell / 25).clamp(12, 200));
    let cells = cell_means(&objects, &grid, &shells);
    let dipoles = shells
        .iter()
        .map(|s| {
            let c: Vec<(f64, f64, f64, f64)> = cells
                .iter()
                .filter(|c| c.shell == s.index && c.n > 0)
                .map(|c| (c.lon, c.lat, c.v, c.v_err))
                .collect();
            fit_dipole(&c)
        })
        .collect();
    MapData {
        grid,
        shells,
        cells,
        dipoles,
    }
}

fn table(m: &MapData, sky: SkyChoice) -> DataTable {
    let cols: &[&'static str] = match sky {
        SkyChoice::Galactic => &COLUMNS_GALACTIC,
        SkyChoice::Supergalactic => &COLUMNS_SUPERGALACTIC,
    };
    let mut t = DataTable::new(cols);
    for c in &m.cells {
        let s = m.shells.iter().find(|s| s.index == c.shell);
        let b = m.grid.bounds(c.cell);
        t.push(vec![
            c.shell.into(),
            s.map_or(f64::NAN, |s| s.lo).into(),
            s.map_or(f64::NAN, |s| s.hi).into(),
            c.cell.into(),
            c.lon.into(),
            c.lat.into(),
            m.grid.cell_solid_angle().into(),
            c.n.into(),
            c.eta.into(),
            c.eta_err.into(),
            c.v.into(),
            c.v_err.into(),
            b.map_or(f64::NAN, |b| b.lon_lo.rem_euclid(360.0)).into(),
            b.map_or(f64::NAN, |b| b.lon_width).into(),
            b.map_or(f64::NAN, |b| b.lat_lo).into(),
            b.map_or(f64::NAN, |b| b.lat_hi).into(),
        ]);
    }
    t
}

fn names(sky: SkyChoice) -> (&'static str, &'static str, &'static str) {
    match sky {
        SkyChoice::Galactic => ("l", "b", "Galactic"),
        SkyChoice::Supergalactic => ("SGL", "SGB", "supergalactic"),
    }
}

/// Map coordinates (R = 1) of a longitude offset from the centre (degrees, not wrapped) and a
/// latitude; longitude increases to the left.
fn project(dl_deg: f64, lat_deg: f64) -> (f64, f64) {
    let t = auxiliary_angle(lat_deg.to_radians());
    (
        -(2.0 * std::f64::consts::SQRT_2 / std::f64::consts::PI) * dl_deg.to_radians() * t.cos(),
        std::f64::consts::SQRT_2 * t.sin(),
    )
}

fn wrap(lon: f64) -> f64 {
    (lon + 180.0).rem_euclid(360.0) - 180.0
}

pub(super) fn flow_map<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
    sky: SkyChoice,
) -> Result<(), ReportError> {
    let sc = Scale::of(ctx);
    let m = map_data(ctx);
    ctx.set_table(table(&m, sky));
    let (ln, bn, frame_name) = names(sky);
    let used: usize = m.shells.first().map_or(0, |s| s.n);
    let filled: Vec<f64> = sorted(
        m.cells
            .iter()
            .filter(|c| c.n >= 3 && c.shell == 0)
            .map(|c| c.v.abs()),
    );
    let vmax = nice_ceil(quantile(&filled, 0.9).max(100.0));
    let bulk = ctx.options.bulkflow.as_ref().and_then(|r| {
        (r.l.is_finite() && r.b.is_finite()).then(|| match sky {
            SkyChoice::Galactic => (r.l, r.b),
            SkyChoice::Supergalactic => galactic_to_supergalactic_deg(r.l, r.b),
        })
    });
    let apex = default_apex("cmb");
    let cmb = match sky {
        SkyChoice::Galactic => (apex.glon_deg, apex.glat_deg),
        SkyChoice::Supergalactic => galactic_to_supergalactic_deg(apex.glon_deg, apex.glat_deg),
    };
    let describe = |s: &Shell| {
        if s.index == 0 {
            format!(
                "all depths, D_{{C}}(z_{{cmb}}) {}–{} Mpc, {} objects",
                fixed(s.lo, 0),
                fixed(s.hi, 0),
                s.n
            )
        } else {
            format!(
                "shell {}: D_{{C}}(z_{{cmb}}) {}–{} Mpc, {} objects",
                s.index,
                fixed(s.lo, 0),
                fixed(s.hi, 0),
                s.n
            )
        }
    };
    let dipole_text: Vec<String> = m
        .shells
        .iter()
        .zip(&m.dipoles)
        .map(|(s, d)| {
            let name = if s.index == 0 {
                "all depths".to_string()
            } else {
                format!("shell {}", s.index)
            };
            match d {
                Some(d) => format!(
                    "{name} {} ± {} km/s towards {ln} = {}°, {bn} = {}°",
                    fixed(d.amplitude, 0),
                    fixed(d.amplitude_err, 0),
                    fixed(d.lon, 0),
                    fixed(d.lat, 0)
                ),
                None => format!("{name}: too few cells for a dipole"),
            }
        })
        .collect();
    let caption = vec![
        rows_line(used, ctx.sample, " with a sky position, finite η and z_cmb, not outliers"),
        format!(
            "Colour: error-weighted mean of v = η/κ (κ = ∂η/∂v at z_cmb) in {} equal-area cells of {} sr (4π/{}; zones of our own, edges in sin {bn}), on a diverging scale (Moreland 2009) from −{v} to +{v} km/s; grey cells hold no object. Shells: equal numbers of objects in redshift distance D_C(z_cmb) ({}).",
            m.grid.len(),
            fixed(m.grid.cell_solid_angle(), 4),
            m.grid.len(),
            super::model_label(ctx),
            v = number(vmax)
        ),
        format!(
            "Black disc: the dipole of the weighted least-squares fit of monopole + dipole to the cell means — {}. The dipole of cell means is a summary, not the maximum-likelihood bulk flow (star, from the bulk-flow result{}).",
            dipole_text.join("; "),
            match &ctx.options.bulkflow {
                Some(r) => format!(": {} ± {} km/s towards l = {}°, b = {}°", fixed(r.amplitude, 0), fixed(r.amplitude_err, 0), fixed(r.l, 1), fixed(r.b, 1)),
                None => ", not given: not marked".into(),
            }
        ),
    ];
    let title = format!("Flow map: mean velocities in equal-area cells, {frame_name} coordinates");
    let body = super::layout::frame(ctx, root, &title, &caption)?;
    let (bw, bh) = body.dim_in_pixel();
    let (bw, bh) = (bw as f64, bh as f64);
    let bar_w = 170.0 * sc.0;
    let legend_h = 44.0 * sc.0;
    let panels = m.shells.len().max(1);
    let cols = if panels > 1 { 2 } else { 1 };
    let rows = panels.div_ceil(cols);
    let cell_w = (bw - bar_w) / cols as f64;
    let cell_h = (bh - legend_h) / rows as f64;
    let head = 30.0 * sc.0;
    let k = ((cell_w - 24.0 * sc.0) / (2.0 * HALF_WIDTH))
        .min((cell_h - head - 10.0 * sc.0) / (2.0 * HALF_HEIGHT));
    let title_font = sc.font(20.0);
    for (p, shell) in m.shells.iter().enumerate() {
        let (col, row) = (p % cols, p / cols);
        let cx = cell_w * (col as f64 + 0.5);
        let cy = cell_h * row as f64 + head + HALF_HEIGHT * k + 4.0 * sc.0;
        let px = |x: f64, y: f64| ((cx + x * k).round() as i32, (cy - y * k).round() as i32);
        super::typeset::draw(
            &body,
            &describe(shell),
            (cx.round() as i32, (cell_h * row as f64 + head * 0.5) as i32),
            &title_font,
            HPos::Center,
            false,
        )?;
        let outline: Vec<(i32, i32)> = (0..=180)
            .map(|i| {
                let t = (i as f64 * 2.0).to_radians();
                px(HALF_WIDTH * t.cos(), HALF_HEIGHT * t.sin())
            })
            .collect();
        body.draw(&Polygon::new(outline.clone(), SKY_BACKGROUND.filled()))
            .map_err(de)?;
        for c in m.cells.iter().filter(|c| c.shell == shell.index) {
            let Some(b) = m.grid.bounds(c.cell) else {
                continue;
            };
            let mid = b.lon_lo + 0.5 * b.lon_width;
            let centre = wrap(mid);
            let steps = ((b.lon_width / 3.0).ceil() as usize).max(2);
            let lat_steps = (((b.lat_hi - b.lat_lo) / 3.0).ceil() as usize).max(2);
            let mut poly = Vec::new();
            let at = |lon: f64, lat: f64| {
                let (x, y) = project(centre + (lon - mid), lat);
                px(x, y)
            };
            for i in 0..=steps {
                poly.push(at(
                    b.lon_lo + b.lon_width * i as f64 / steps as f64,
                    b.lat_lo,
                ));
            }
            for i in 0..=lat_steps {
                let lat = b.lat_lo + (b.lat_hi - b.lat_lo) * i as f64 / lat_steps as f64;
                poly.push(at(b.lon_lo + b.lon_width, lat));
            }
            for i in (0..=steps).rev() {
                poly.push(at(
                    b.lon_lo + b.lon_width * i as f64 / steps as f64,
                    b.lat_hi,
                ));
            }
            for i in (0..=lat_steps).rev() {
                let lat = b.lat_lo + (b.lat_hi - b.lat_lo) * i as f64 / lat_steps as f64;
                poly.push(at(b.lon_lo, lat));
            }
            let colour = if c.n > 0 && c.v.is_finite() {
                diverging(0.5 + 0.5 * c.v / vmax)
            } else {
                RGBColor(215, 215, 215)
            };
            body.draw(&Polygon::new(poly.clone(), colour.filled()))
                .map_err(de)?;
            poly.push(poly[0]);
            body.draw(&PathElement::new(
                poly,
                WHITE.mix(0.7).stroke_width(sc.upx(0.8)),
            ))
            .map_err(de)?;
        }
        // Equator and outline.
        let eq: Vec<(i32, i32)> = (0..=72)
            .map(|i| {
                let (x, y) = project(-180.0 + 5.0 * i as f64, 0.0);
                px(x, y)
            })
            .collect();
        body.draw(&PathElement::new(eq, GRID.stroke_width(sc.upx(1.0))))
            .map_err(de)?;
        body.draw(&PathElement::new(outline, INK.stroke_width(sc.upx(1.6))))
            .map_err(de)?;
        let mark = |lon: f64, lat: f64| {
            let (x, y) = project(wrap(lon), lat);
            px(x, y)
        };
        draw_dipole(&body, sc, mark(cmb.0, cmb.1), 8.0)?;
        if let Some((l, b)) = bulk {
            draw_star(&body, sc, mark(l, b), 13.0)?;
        }
        if let Some(d) = m.dipoles.get(p).copied().flatten() {
            let at = mark(d.lon, d.lat);
            body.draw(&Circle::new(at, sc.px(8.0), WHITE.filled()))
                .map_err(de)?;
            body.draw(&Circle::new(at, sc.px(6.0), INK.filled()))
                .map_err(de)?;
        }
    }
    // Legend line below the panels.
    let ly = (bh - legend_h * 0.5) as i32;
    let lf = sc.font(19.0).color(&LABEL_GREY);
    let mut lx = sc.px(20.0);
    body.draw(&Circle::new((lx, ly), sc.px(8.0), WHITE.filled()))
        .map_err(de)?;
    body.draw(&Circle::new((lx, ly), sc.px(6.0), INK.filled()))
        .map_err(de)?;
    let t1 = "dipole fitted to the cell means";
    text(
        &body,
        t1,
        (lx + sc.px(16.0), ly),
        &lf,
        (HPos::Left, VPos::Center),
    )?;
    lx += sc.px(16.0) + super::typeset::width(&body, t1, &lf) + sc.px(36.0);
    draw_star(&body, sc, (lx, ly), 11.0)?;
    let t2 = if bulk.is_some() {
        "maximum-likelihood bulk flow (bulk-flow result)"
    } else {
        "bulk flow not marked: no bulk-flow result given"
    };
    text(
        &body,
        t2,
        (lx + sc.px(18.0), ly),
        &lf,
        (HPos::Left, VPos::Center),
    )?;
    lx += sc.px(18.0) + super::typeset::width(&body, t2, &lf) + sc.px(36.0);
    draw_dipole(&body, sc, (lx, ly), 8.0)?;
    text(
        &body,
        &format!(
            "CMB dipole ({}); longitude {ln} increases to the left from 0° at the centre",
            apex.name
        ),
        (lx + sc.px(16.0), ly),
        &lf,
        (HPos::Left, VPos::Center),
    )?;
    // Colour bar.
    let bx = (bw - bar_w + 40.0 * sc.0) as i32;
    let top = (60.0 * sc.0) as i32;
    let bottom = (bh - legend_h - 40.0 * sc.0) as i32;
    let bar_wd = sc.px(28.0);
    super::typeset::draw(
        &body,
        "mean v (km s^{−1})",
        (bx + bar_wd / 2, top - sc.px(30.0)),
        &sc.font(21.0),
        HPos::Center,
        false,
    )?;
    let span = (bottom - top).max(10);
    for i in 0..span {
        let t = 1.0 - i as f64 / (span - 1) as f64;
        body.draw(&Rectangle::new(
            [(bx, top + i), (bx + bar_wd, top + i + 1)],
            diverging(t).filled(),
        ))
        .map_err(de)?;
    }
    body.draw(&Rectangle::new(
        [(bx, top), (bx + bar_wd, bottom)],
        INK.stroke_width(sc.upx(1.2)),
    ))
    .map_err(de)?;
    let axis = Axis::linear(-vmax, vmax);
    for v in axis.ticks(6) {
        let yy = top + ((1.0 - (v + vmax) / (2.0 * vmax)) * (span - 1) as f64).round() as i32;
        body.draw(&PathElement::new(
            vec![(bx + bar_wd, yy), (bx + bar_wd + sc.px(6.0), yy)],
            INK.stroke_width(sc.upx(1.2)),
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
            (bx + bar_wd + sc.px(10.0), yy),
            &sc.font(18.0),
            (HPos::Left, VPos::Center),
        )?;
    }
    Ok(())
}
