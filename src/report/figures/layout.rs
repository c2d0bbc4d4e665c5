//! Layout and text: pixel scaling, text with wrapping and halos, frames, charts, legends and
//! scatter plots with outliers.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::report::colour::{ERRORBAR, GRID, INK, OUTLIER, POINT};

use crate::report::ReportError;

use super::axis::Axis;
use super::{de, Area, Chart, Context};

/// Secondary text.
pub(super) const LABEL_GREY: RGBColor = RGBColor(90, 96, 106);

/// Pixel sizes scale with the figure height (1000 px reference).
#[derive(Clone, Copy)]
pub(super) struct Scale(pub(super) f64);

impl Scale {
    pub(super) fn of(ctx: &Context<'_>) -> Scale {
        Scale(ctx.canvas.scale)
    }
    pub(super) fn px(self, v: f64) -> i32 {
        (v * self.0).round() as i32
    }
    pub(super) fn upx(self, v: f64) -> u32 {
        (v * self.0).round().max(1.0) as u32
    }
    pub(super) fn font(self, size: f64) -> TextStyle<'static> {
        TextStyle::from(("sans-serif", size * self.0).into_font()).color(&INK)
    }
    pub(super) fn bold(self, size: f64) -> TextStyle<'static> {
        TextStyle::from(("sans-serif", size * self.0, FontStyle::Bold).into_font()).color(&INK)
    }
}

pub(super) fn text<DB: DrawingBackend>(
    area: &Area<DB>,
    s: &str,
    at: (i32, i32),
    style: &TextStyle<'static>,
    anchor: (HPos, VPos),
) -> Result<(), ReportError> {
    area.draw(&Text::new(
        s.to_string(),
        at,
        style.pos(Pos::new(anchor.0, anchor.1)),
    ))
    .map_err(de)
}

/// Break `s` into lines no wider than `max_w` pixels (at spaces).
pub(super) fn wrap<DB: DrawingBackend>(
    area: &Area<DB>,
    s: &str,
    style: &TextStyle<'static>,
    max_w: i32,
) -> Vec<String> {
    let width = |t: &str| {
        area.estimate_text_size(t, style)
            .map(|(w, _)| w as i32)
            .unwrap_or((t.chars().count() as f64 * 0.55 * style.font.get_size()) as i32)
    };
    let mut lines = Vec::new();
    let mut current = String::new();
    for word in s.split(' ') {
        let candidate = if current.is_empty() {
            word.to_string()
        } else {
            format!("{current} {word}")
        };
        if !current.is_empty() && width(&candidate) > max_w {
            lines.push(std::mem::take(&mut current));
            current = word.to_string();
        } else {
            current = candidate;
        }
    }
    if !current.is_empty() {
        lines.push(current);
    }
    lines
}

/// Text left-aligned with its baseline region at `at` (vertical centre), on a light halo so that
/// it stays readable over data.
pub(super) fn halo_text<DB: DrawingBackend>(
    area: &Area<DB>,
    s: &str,
    at: (i32, i32),
    style: &TextStyle<'static>,
    sc: Scale,
) -> Result<(), ReportError> {
    let (w, h) = area.estimate_text_size(s, style).map_err(de)?;
    let pad = sc.px(4.0);
    let (w, h) = (w as i32, h as i32);
    area.draw(&Rectangle::new(
        [
            (at.0 - pad, at.1 - h / 2 - pad),
            (at.0 + w + pad, at.1 + h / 2 + pad),
        ],
        WHITE.mix(0.82).filled(),
    ))
    .map_err(de)?;
    text(area, s, at, style, (HPos::Left, VPos::Center))
}

/// Title band on top, caption lines at the bottom; returns the area between.
pub(super) fn frame<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
    title: &str,
    caption: &[String],
) -> Result<Area<DB>, ReportError> {
    let sc = Scale::of(ctx);
    {
        let mut r = ctx.record.borrow_mut();
        r.title = title.to_string();
        r.caption = caption.to_vec();
    }
    if ctx.paper() {
        // Paper style: no title or caption in the image (they go to NAME.caption.txt).
        let m = sc.upx(6.0);
        return Ok(root.margin(m, m, m, m));
    }
    let (w, h) = root.dim_in_pixel();
    let title_h = sc.px(66.0);
    let caption_font = sc.font(20.0);
    let max_w = w as i32 - sc.px(60.0);
    let mut lines = Vec::new();
    for c in caption {
        lines.extend(wrap(root, c, &caption_font, max_w));
    }
    let caption_h = sc.px(14.0 + 27.0 * lines.len() as f64);
    text(
        root,
        title,
        (sc.px(30.0), sc.px(20.0)),
        &sc.bold(34.0),
        (HPos::Left, VPos::Top),
    )?;
    if let Some(label) = &ctx.options.label {
        text(
            root,
            label,
            (w as i32 - sc.px(30.0), sc.px(26.0)),
            &sc.font(22.0).color(&RGBColor(110, 116, 126)),
            (HPos::Right, VPos::Top),
        )?;
    }
    let y0 = h as i32 - caption_h + sc.px(6.0);
    for (k, line) in lines.iter().enumerate() {
        text(
            root,
            line,
            (sc.px(30.0), y0 + sc.px(27.0) * k as i32),
            &caption_font,
            (HPos::Left, VPos::Top),
        )?;
    }
    let body = root.margin(title_h as u32, caption_h as u32, 0, 0);
    Ok(body)
}

/// A chart with our mesh and labels. `x_desc` None: tick marks without labels (an upper panel
/// sharing its x axis with the one below). The axis titles are typeset markup
/// ([`super::typeset`]).
pub(super) fn chart<'a, DB: DrawingBackend>(
    area: &'a Area<DB>,
    sc: Scale,
    x: Axis,
    y: Axis,
    x_desc: Option<&str>,
    y_desc: &str,
) -> Result<Chart<'a, DB>, ReportError> {
    let x_area = if x_desc.is_some() {
        sc.upx(72.0)
    } else {
        sc.upx(10.0)
    };
    let y_area = sc.upx(128.0);
    let mut chart = ChartBuilder::on(area)
        .margin_top(sc.upx(12.0))
        .margin_right(sc.upx(40.0))
        .margin_left(sc.upx(16.0))
        .x_label_area_size(x_area)
        .y_label_area_size(y_area)
        .build_cartesian_2d(x, y)
        .map_err(de)?;
    let blank = |_: &f64| String::new();
    let mut mesh = chart.configure_mesh();
    mesh.label_style(sc.font(23.0))
        .x_labels(9)
        .y_labels(7)
        .bold_line_style(GRID.mix(0.55))
        .light_line_style(TRANSPARENT)
        .axis_style(INK.stroke_width(sc.upx(1.6)));
    if x_desc.is_none() {
        mesh.x_label_formatter(&blank);
    }
    mesh.draw().map_err(de)?;
    // Close the frame on top and right.
    chart
        .draw_series(std::iter::once(PathElement::new(
            vec![(x.lo, y.hi), (x.hi, y.hi), (x.hi, y.lo)],
            INK.mix(0.5).stroke_width(sc.upx(1.2)),
        )))
        .map_err(de)?;
    // Axis titles, typeset.
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    let (bx, by) = area.get_base_pixel();
    let style = sc.font(27.0);
    if let Some(d) = x_desc {
        super::typeset::draw(
            area,
            d,
            (
                (xr.start + xr.end) / 2 - bx,
                yr.end - by + (x_area as f64 * 0.7) as i32,
            ),
            &style,
            HPos::Center,
            false,
        )?;
    }
    super::typeset::draw(
        area,
        y_desc,
        (
            xr.start - bx - (y_area as f64 * 0.78) as i32,
            (yr.start + yr.end) / 2 - by,
        ),
        &style,
        HPos::Center,
        true,
    )?;
    Ok(chart)
}

/// Where a legend of `labels` covers the fewest of the `occupied` points (data coordinates):
/// one of the four corners or the middle of the top or bottom edge, the upper left on a tie.
pub(super) fn free_corner<DB: DrawingBackend>(
    chart: &Chart<'_, DB>,
    sc: Scale,
    labels: &[String],
    occupied: &[(f64, f64)],
) -> SeriesLabelPosition {
    let area = chart.plotting_area();
    let (xr, yr) = area.get_pixel_range();
    let font = sc.font(21.0);
    let text_w = labels
        .iter()
        .map(|l| {
            area.estimate_text_size(l, &font)
                .map(|(w, _)| w as i32)
                .unwrap_or(0)
        })
        .max()
        .unwrap_or(0);
    let w = text_w + sc.px(38.0 + 40.0);
    let h = sc.px(38.0) * labels.len() as i32 + sc.px(20.0);
    let m = sc.px(14.0);
    let cx = (xr.start + xr.end) / 2;
    let boxes = [
        (SeriesLabelPosition::UpperLeft, xr.start + m, yr.start + m),
        (
            SeriesLabelPosition::UpperRight,
            xr.end - m - w,
            yr.start + m,
        ),
        (SeriesLabelPosition::LowerLeft, xr.start + m, yr.end - m - h),
        (
            SeriesLabelPosition::LowerRight,
            xr.end - m - w,
            yr.end - m - h,
        ),
        (SeriesLabelPosition::UpperMiddle, cx - w / 2, yr.start + m),
        (SeriesLabelPosition::LowerMiddle, cx - w / 2, yr.end - m - h),
    ];
    let pixels: Vec<(i32, i32)> = occupied
        .iter()
        .filter(|p| p.0.is_finite() && p.1.is_finite())
        .map(|p| chart.backend_coord(p))
        .collect();
    let mut best = (usize::MAX, SeriesLabelPosition::UpperLeft);
    for (pos, x0, y0) in boxes {
        let n = pixels
            .iter()
            .filter(|p| p.0 >= x0 && p.0 <= x0 + w && p.1 >= y0 && p.1 <= y0 + h)
            .count();
        if n < best.0 {
            best = (n, pos);
        }
    }
    best.1
}

pub(super) fn legend<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    sc: Scale,
    position: SeriesLabelPosition,
) -> Result<(), ReportError> {
    chart
        .configure_series_labels()
        .position(position)
        .margin(sc.upx(14.0))
        .legend_area_size(sc.upx(38.0))
        .background_style(WHITE.mix(0.9))
        .border_style(INK.mix(0.35))
        .label_font(sc.font(21.0))
        .draw()
        .map_err(de)
}

/// A point marker in pixel offsets around a data point.
pub(super) fn ring(sc: Scale) -> ShapeStyle {
    OUTLIER.stroke_width(sc.upx(2.2))
}

/// Scatter with error bars; points beyond the y range become triangles at the edge. Returns
/// how many points were beyond the range.
pub(super) fn scatter<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    sc: Scale,
    points: &[(f64, f64, f64, bool)],
    x: Axis,
    y: Axis,
    point_label: Option<&str>,
) -> Result<usize, ReportError> {
    let dot = sc.px(3.4);
    let ring_r = sc.px(6.5);
    let tri = sc.px(7.0);
    let inside = |p: &&(f64, f64, f64, bool)| x.contains(p.0) && y.contains(p.1);
    // Error bars of ordinary points, clipped to the range.
    chart
        .draw_series(
            points
                .iter()
                .filter(|p| !p.3 && p.2.is_finite() && p.2 > 0.0 && x.contains(p.0))
                .filter_map(|&(px, py, e, _)| {
                    let a = y.clamp(py - e);
                    let b = y.clamp(py + e);
                    (b > a).then(|| {
                        PathElement::new(vec![(px, a), (px, b)], ERRORBAR.mix(0.45).stroke_width(1))
                    })
                }),
        )
        .map_err(de)?;
    // Beyond the range: a triangle at the edge, pointing the way the point lies.
    let beyond_marker = |p: &(f64, f64, f64, bool), style: ShapeStyle| {
        let h = tri / 2;
        let t = if p.1 > y.hi {
            vec![(0, -tri), (tri, h), (-tri, h)]
        } else if p.1 < y.lo {
            vec![(0, tri), (tri, -h), (-tri, -h)]
        } else if p.0 > x.hi {
            vec![(tri, 0), (-h, tri), (-h, -tri)]
        } else {
            vec![(-tri, 0), (h, tri), (h, -tri)]
        };
        let mut pts = t.clone();
        pts.push(t[0]);
        EmptyElement::at((x.clamp(p.0), y.clamp(p.1))) + PathElement::new(pts, style)
    };
    let style = POINT.mix(0.55).filled();
    let series = chart
        .draw_series(
            points
                .iter()
                .filter(|p| !p.3)
                .filter(inside)
                .map(|p| Circle::new((p.0, p.1), dot, style)),
        )
        .map_err(de)?;
    if let Some(label) = point_label {
        series
            .label(label.to_string())
            .legend(move |(a, b)| Circle::new((a, b), dot + 2, style));
    }
    let beyond: Vec<&(f64, f64, f64, bool)> = points
        .iter()
        .filter(|p| !(x.contains(p.0) && y.contains(p.1)))
        .collect();
    chart
        .draw_series(
            beyond
                .iter()
                .filter(|p| !p.3)
                .map(|p| beyond_marker(p, POINT.stroke_width(sc.upx(2.0)))),
        )
        .map_err(de)?;
    let n_out = points.iter().filter(|p| p.3).count();
    let rs = ring(sc);
    let series = chart
        .draw_series(
            points
                .iter()
                .filter(|p| p.3)
                .filter(inside)
                .map(|p| Circle::new((p.0, p.1), ring_r, rs)),
        )
        .map_err(de)?;
    if point_label.is_some() {
        series
            .label(format!("outliers ({n_out}), open markers"))
            .legend(move |(a, b)| Circle::new((a, b), ring_r, rs));
    }
    chart
        .draw_series(beyond.iter().filter(|p| p.3).map(|p| beyond_marker(p, rs)))
        .map_err(de)?;
    Ok(beyond.len())
}
