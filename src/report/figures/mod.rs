//! The four figures, drawn on any plotters backend (PNG through the bitmap backend, SVG).
//!
//! Here: the shared context, the entry point [`write_figure`] and the captions more than one
//! figure uses. The drawing toolkit is in `axis` (axes, ticks, number formatting, clipping
//! to an axis), `stats` (quantiles and running medians) and `layout` (scaling, text, frames,
//! charts, legends, scatter plots); each figure has its own file: `hubble`,
//! `velocity_distance`, `sky_map` and `pulls`.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::physics::cosmology::Cosmology;
use crate::report::data::Sample;
use crate::report::{Figure, PlotOptions, ReportError};

use axis::Axis;
use hubble::hubble;
use pulls::pulls;
use sky_map::sky_map;
use velocity_distance::velocity_distance;

mod axis;
mod hubble;
mod layout;
mod pulls;
mod sky_map;
mod stats;
mod velocity_distance;

pub(crate) use axis::number;

/// Everything a figure needs.
pub(crate) struct Context<'a> {
    pub sample: &'a Sample,
    pub cosmology: &'a Cosmology,
    pub options: &'a PlotOptions,
}

type Area<DB> = DrawingArea<DB, Shift>;
type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<Axis, Axis>>;

fn de<E: std::fmt::Display>(e: E) -> ReportError {
    ReportError::Drawing(e.to_string())
}

/// Write one figure to `path` (the extension chooses PNG or SVG), atomically.
pub(crate) fn write_figure(
    figure: Figure,
    ctx: &Context<'_>,
    path: &Path,
) -> Result<(), ReportError> {
    let size = (ctx.options.width, ctx.options.height);
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default();
    match ext.as_str() {
        "svg" => {
            let mut text = String::new();
            {
                let root = SVGBackend::with_string(&mut text, size).into_drawing_area();
                draw(figure, ctx, &root)?;
                root.present().map_err(de)?;
            }
            Ok(crate::catalogue::atomic::write_bytes(
                path,
                text.as_bytes(),
            )?)
        }
        // The PNG encoder writes its file by name: the one atomic writer gives it a fresh
        // temporary path with the destination's extension.
        "png" => Ok(crate::catalogue::atomic::write_via_path(path, |tmp| {
            let root = BitMapBackend::new(tmp, size).into_drawing_area();
            draw(figure, ctx, &root).map_err(|e| e.to_string())?;
            root.present().map_err(|e| de(e).to_string())
        })?),
        other => Err(ReportError::ImageType(other.to_string())),
    }
}

fn draw<DB: DrawingBackend>(
    figure: Figure,
    ctx: &Context<'_>,
    root: &Area<DB>,
) -> Result<(), ReportError> {
    root.fill(&WHITE).map_err(de)?;
    match figure {
        Figure::Hubble => hubble(ctx, root),
        Figure::VelocityDistance => velocity_distance(ctx, root),
        Figure::Sky(sky) => sky_map(ctx, root, sky),
        Figure::Pulls => pulls(ctx, root),
    }
}

fn rows_line(used: usize, sample: &Sample, needs: &str) -> String {
    let missing = sample.rows.len().saturating_sub(used);
    let extra = if missing > 0 {
        format!(", {missing} ok rows without these values")
    } else {
        String::new()
    };
    format!(
        "{used} of {} rows used (status ok{needs}). Left out: {} with a status other than ok{extra}.",
        sample.total, sample.not_ok
    )
}

fn model_label(ctx: &Context<'_>) -> String {
    let p = ctx.cosmology.params();
    let flat = ctx.cosmology.params().omega_k().abs() < 1e-9;
    let lcdm = p.w0 == -1.0 && p.wa == 0.0;
    let kind = match (flat, lcdm) {
        (true, true) => "flat ΛCDM",
        (false, true) => "ΛCDM",
        _ => "FLRW",
    };
    format!(
        "{kind}, H0 = {} km/s/Mpc, Ω_m = {}",
        number(p.h0),
        number(p.omega_m)
    )
}
