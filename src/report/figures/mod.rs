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
use std::cell::RefCell;

use crate::report::tables::DataTable;
use crate::report::{Canvas, Figure, PlotOptions, ReportError, Style};

use axis::Axis;
use bulk_flow::bulk_flow;
use flow_map::flow_map;
use hubble::hubble;
use pulls::pulls;
use sky_map::sky_map;
use velocity_distance::velocity_distance;

mod axis;
mod bulk_flow;
mod flow_map;
mod hubble;
mod layout;
mod pulls;
mod sky_map;
mod stats;
mod typeset;
mod velocity_distance;

pub(crate) use axis::number;

/// Everything a figure needs.
pub(crate) struct Context<'a> {
    pub sample: &'a Sample,
    pub cosmology: &'a Cosmology,
    pub options: &'a PlotOptions,
    /// Size and scale of the file being drawn.
    pub canvas: Canvas,
    /// What the drawing noted for the files beside the image (its caption, its numbers).
    pub record: &'a RefCell<FigureRecord>,
}

/// Title, caption and data table of a figure, as the drawing made them.
#[derive(Debug, Clone, Default)]
pub(crate) struct FigureRecord {
    pub title: String,
    pub caption: Vec<String>,
    pub table: Option<DataTable>,
}

impl Context<'_> {
    pub(crate) fn set_table(&self, table: DataTable) {
        self.record.borrow_mut().table = Some(table);
    }

    pub(crate) fn paper(&self) -> bool {
        self.options.style == Style::Paper
    }
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
    let size = (ctx.canvas.width, ctx.canvas.height);
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default();
    let svg = |ctx: &Context<'_>| -> Result<String, ReportError> {
        let mut text = String::new();
        {
            let root = SVGBackend::with_string(&mut text, size).into_drawing_area();
            draw(figure, ctx, &root)?;
            root.present().map_err(de)?;
        }
        Ok(text)
    };
    match ext.as_str() {
        "svg" => {
            let mut text = svg(ctx)?;
            if ctx.paper() {
                text = in_points(&text, size);
            }
            Ok(crate::catalogue::atomic::write_bytes(
                path,
                text.as_bytes(),
            )?)
        }
        "pdf" => {
            let pdf = crate::report::pdf::svg_to_pdf(&svg(ctx)?)?;
            Ok(crate::catalogue::atomic::write_bytes(path, &pdf)?)
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
        Figure::VelocityDistance => velocity_distance(ctx, root, false),
        Figure::VelocityInferred => velocity_distance(ctx, root, true),
        Figure::Sky(sky) => sky_map(ctx, root, sky),
        Figure::FlowMap(sky) => flow_map(ctx, root, sky),
        Figure::BulkFlow => bulk_flow(ctx, root),
        Figure::Pulls => pulls(ctx, root),
    }
}

/// A paper-style SVG sized in points: the drawing's user unit is one point.
fn in_points(svg: &str, size: (u32, u32)) -> String {
    let old = format!("width=\"{}\" height=\"{}\"", size.0, size.1);
    // plotters writes viewBox="0 0 W H" after the size, so the user unit becomes 1 pt.
    let new = format!("width=\"{}pt\" height=\"{}pt\"", size.0, size.1);
    match svg.find(&old) {
        Some(i) if i < 400 => format!("{}{}{}", &svg[..i], new, &svg[i + old.len()..]),
        _ => svg.to_string(),
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
