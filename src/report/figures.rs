//! The four figures, drawn on any plotters backend (PNG through the bitmap backend, SVG).

use std::path::Path;

use plotters::coord::ranged1d::{KeyPointHint, NoDefaultFormatting, Ranged, ValueFormatter};
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::colour::{
    diverging, ACCENT, ERRORBAR, GRID, INK, OUTLIER, POINT, SKY_BACKGROUND, TRUTH,
};
use super::data::{galactic_to_supergalactic_deg, supergalactic_to_galactic_deg, Row, Sample};
use super::projection::{mollweide, HALF_HEIGHT, HALF_WIDTH};
use super::{Figure, PlotOptions, SkyChoice};
use crate::physics::cosmology::Cosmology;
use crate::physics::redshift::doppler_redshift;
use crate::physics::restframe::default_apex;

/// Everything a figure needs.
pub(crate) struct Context<'a> {
    pub sample: &'a Sample,
    pub cosmology: &'a Cosmology,
    pub options: &'a PlotOptions,
}

type Area<DB> = DrawingArea<DB, Shift>;
type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<Axis, Axis>>;

fn de<E: std::fmt::Display>(e: E) -> String {
    format!("drawing failed: {e}")
}

/// Secondary text.
const LABEL_GREY: RGBColor = RGBColor(90, 96, 106);

/// The peculiar velocity whose residual curves the Hubble diagram shows, km/s.
const GUIDE_VELOCITY: f64 = 500.0;

/// Write one figure to `path` (the extension chooses PNG or SVG), atomically.
pub(crate) fn write_figure(figure: Figure, ctx: &Context<'_>, path: &Path) -> Result<(), String> {
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
            super::atomic_write(path, text.as_bytes())
        }
        "png" => {
            let dir = super::folder_of(path);
            let tmp = tempfile::Builder::new()
                .prefix(".flowsift-partial-")
                .suffix(".png")
                .tempfile_in(dir)
                .map_err(|e| format!("cannot create a temporary file: {e}"))?
                .into_temp_path();
            {
                let root = BitMapBackend::new(&tmp, size).into_drawing_area();
                draw(figure, ctx, &root)?;
                root.present().map_err(de)?;
            }
            super::set_readable(&tmp);
            tmp.persist(path)
                .map_err(|e| format!("cannot move the finished file into place: {e}"))?;
            Ok(())
        }
        other => Err(format!("unknown image type .{other} (use .png or .svg)")),
    }
}

fn draw<DB: DrawingBackend>(
    figure: Figure,
    ctx: &Context<'_>,
    root: &Area<DB>,
) -> Result<(), String> {
    root.fill(&WHITE).map_err(de)?;
    match figure {
        Figure::Hubble => hubble(ctx, root),
        Figure::VelocityDistance => velocity_distance(ctx, root),
        Figure::Sky(sky) => sky_map(ctx, root, sky),
        Figure::Pulls => pulls(ctx, root),
    }
}

// ---------------------------------------------------------------------------------------------
// Axes, numbers, statistics
// ---------------------------------------------------------------------------------------------

/// A linear or base-10 logarithmic axis with round tick values.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Axis {
    lo: f64,
    hi: f64,
    log: bool,
}

impl Axis {
    fn linear(lo: f64, hi: f64) -> Axis {
        let (lo, hi) = widen(lo, hi, false);
        Axis { lo, hi, log: false }
    }

    fn log(lo: f64, hi: f64) -> Axis {
        let (lo, hi) = widen(lo, hi, true);
        Axis { lo, hi, log: true }
    }

    fn t(&self, v: f64) -> f64 {
        if self.log {
            v.log10()
        } else {
            v
        }
    }

    fn contains(&self, v: f64) -> bool {
        v >= self.lo && v <= self.hi
    }

    fn clamp(&self, v: f64) -> f64 {
        v.clamp(self.lo, self.hi)
    }

    /// Round tick values, at most about `max_n` of them.
    fn ticks(&self, max_n: usize) -> Vec<f64> {
        let max_n = max_n.max(2);
        if self.log {
            let decades = (self.hi / self.lo).log10();
            let sets: [&[f64]; 4] = [
                &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0],
                &[1.0, 2.0, 3.0, 5.0],
                &[1.0, 2.0, 5.0],
                &[1.0],
            ];
            let start = if decades < 0.8 {
                0
            } else if decades < 2.5 {
                1
            } else if decades < 5.0 {
                2
            } else {
                3
            };
            for set in &sets[start..] {
                let v = log_ticks(self.lo, self.hi, set);
                if v.len() <= max_n || set.len() == 1 {
                    return v;
                }
            }
            log_ticks(self.lo, self.hi, &[1.0])
        } else {
            let step = nice_step((self.hi - self.lo) / max_n as f64);
            let first = (self.lo / step - 1e-9).ceil() as i64;
            let last = (self.hi / step + 1e-9).floor() as i64;
            (first..=last).map(|k| k as f64 * step).collect()
        }
    }
}

fn log_ticks(lo: f64, hi: f64, mantissas: &[f64]) -> Vec<f64> {
    let mut v = Vec::new();
    let d0 = lo.log10().floor() as i32;
    let d1 = hi.log10().ceil() as i32;
    for d in d0..=d1 {
        for m in mantissas {
            let t = m * 10f64.powi(d);
            if t >= lo * (1.0 - 1e-9) && t <= hi * (1.0 + 1e-9) {
                v.push(t);
            }
        }
    }
    v
}

/// A usable (lo, hi): finite, ordered, of non-zero width (and positive on a log axis).
fn widen(lo: f64, hi: f64, log: bool) -> (f64, f64) {
    let (mut lo, mut hi) = if lo.is_finite() && hi.is_finite() {
        (lo.min(hi), lo.max(hi))
    } else if log {
        (0.01, 0.1)
    } else {
        (0.0, 1.0)
    };
    if log {
        if hi <= 0.0 {
            return (0.01, 0.1);
        }
        if lo <= 0.0 {
            lo = hi / 100.0;
        }
        if hi / lo < 1.01 {
            lo /= 1.5;
            hi *= 1.5;
        }
    } else if hi - lo <= 1e-12 * (1.0 + lo.abs()) {
        let pad = if lo == 0.0 { 1.0 } else { 0.1 * lo.abs() };
        lo -= pad;
        hi += pad;
    }
    (lo, hi)
}

impl Ranged for Axis {
    type FormatOption = NoDefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        let a = self.t(self.lo);
        let b = self.t(self.hi);
        let f = (self.t(*value) - a) / (b - a);
        let f = if f.is_finite() {
            f.clamp(-10.0, 10.0)
        } else {
            0.0
        };
        (limit.0 as f64 + f * (limit.1 - limit.0) as f64).round() as i32
    }

    fn key_points<H: KeyPointHint>(&self, hint: H) -> Vec<f64> {
        self.ticks(hint.bold_points().min(hint.max_num_points()))
    }

    fn range(&self) -> std::ops::Range<f64> {
        self.lo..self.hi
    }
}

impl ValueFormatter<f64> for Axis {
    fn format(value: &f64) -> String {
        number(*value)
    }
    fn format_ext(&self, value: &f64) -> String {
        number(*value)
    }
}

/// 1, 2, 2.5 or 5 times a power of ten, at least `raw`.
fn nice_step(raw: f64) -> f64 {
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let p = 10f64.powf(raw.log10().floor());
    for m in [1.0, 2.0, 2.5, 5.0, 10.0] {
        if m * p >= raw * (1.0 - 1e-12) {
            return m * p;
        }
    }
    10.0 * p
}

/// The smallest of 1, 1.5, 2, 2.5, 3, 4, 5, 6, 8 times a power of ten that is ≥ `v`.
fn nice_ceil(v: f64) -> f64 {
    if !(v.is_finite() && v > 0.0) {
        return 1.0;
    }
    let p = 10f64.powf(v.log10().floor());
    for m in [1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0] {
        if m * p >= v * (1.0 - 1e-12) {
            return m * p;
        }
    }
    10.0 * p
}

/// A tick or legend number: up to 6 significant digits, no trailing zeros, a true minus.
pub(crate) fn number(v: f64) -> String {
    if !v.is_finite() {
        return "—".into();
    }
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    let text = if !(1e-4..1e7).contains(&a) {
        format!("{a:.3e}")
    } else {
        let decimals = (5 - a.log10().floor() as i32).clamp(0, 10) as usize;
        let t = format!("{a:.decimals$}");
        if t.contains('.') {
            t.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            t
        }
    };
    if v < 0.0 {
        format!("−{text}")
    } else {
        text
    }
}

/// A number rounded to `decimals`, with a true minus sign.
fn fixed(v: f64, decimals: usize) -> String {
    let t = format!("{:.*}", decimals, v.abs());
    let zero = t.chars().all(|c| c == '0' || c == '.');
    if v < 0.0 && !zero {
        format!("−{t}")
    } else {
        t
    }
}

/// Quantile `q` of sorted finite values (linear interpolation); NaN if empty.
fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let pos = q.clamp(0.0, 1.0) * (sorted.len() - 1) as f64;
    let i = pos.floor() as usize;
    let j = (i + 1).min(sorted.len() - 1);
    let f = pos - i as f64;
    sorted[i] * (1.0 - f) + sorted[j] * f
}

fn sorted(values: impl IntoIterator<Item = f64>) -> Vec<f64> {
    let mut v: Vec<f64> = values.into_iter().filter(|x| x.is_finite()).collect();
    v.sort_by(f64::total_cmp);
    v
}

/// Running medians along x: windows of `width` points (sorted by x), every `step` points;
/// each entry is the median x and the medians of each of the value columns.
fn running_medians(
    points: &mut [(f64, [f64; 2])],
    width: usize,
    step: usize,
) -> Vec<(f64, [f64; 2])> {
    points.sort_by(|a, b| a.0.total_cmp(&b.0));
    let n = points.len();
    if n < 3 {
        return Vec::new();
    }
    let width = width.clamp(3, n);
    let step = step.max(1);
    let mut out = Vec::new();
    let mut start = 0;
    loop {
        let w = &points[start..start + width];
        let xs = sorted(w.iter().map(|p| p.0));
        let a = sorted(w.iter().map(|p| p.1[0]));
        let b = sorted(w.iter().map(|p| p.1[1]));
        out.push((quantile(&xs, 0.5), [quantile(&a, 0.5), quantile(&b, 0.5)]));
        if start + width >= n {
            break;
        }
        start = (start + step).min(n - width);
    }
    out
}

/// Split a curve into the pieces that lie inside the y range (crossings interpolated).
fn clip_curve(points: &[(f64, f64)], y: &Axis) -> Vec<Vec<(f64, f64)>> {
    let mut pieces = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    for w in points.windows(2) {
        let (a, b) = (w[0], w[1]);
        if !(a.1.is_finite() && b.1.is_finite()) {
            if current.len() > 1 {
                pieces.push(std::mem::take(&mut current));
            }
            current.clear();
            continue;
        }
        let cross = |p: (f64, f64), q: (f64, f64), level: f64| {
            let f = (level - p.1) / (q.1 - p.1);
            (p.0 + f * (q.0 - p.0), level)
        };
        let inside = |p: (f64, f64)| y.contains(p.1);
        match (inside(a), inside(b)) {
            (true, true) => {
                if current.is_empty() {
                    current.push(a);
                }
                current.push(b);
            }
            (true, false) => {
                if current.is_empty() {
                    current.push(a);
                }
                let level = if b.1 > y.hi { y.hi } else { y.lo };
                current.push(cross(a, b, level));
                pieces.push(std::mem::take(&mut current));
            }
            (false, true) => {
                let level = if a.1 > y.hi { y.hi } else { y.lo };
                current = vec![cross(a, b, level), b];
            }
            (false, false) => {}
        }
    }
    if current.len() > 1 {
        pieces.push(current);
    }
    pieces
}

// ---------------------------------------------------------------------------------------------
// Layout and text
// ---------------------------------------------------------------------------------------------

/// Pixel sizes scale with the figure height (1000 px reference).
#[derive(Clone, Copy)]
struct Scale(f64);

impl Scale {
    fn of(ctx: &Context<'_>) -> Scale {
        Scale(ctx.options.height as f64 / 1000.0)
    }
    fn px(self, v: f64) -> i32 {
        (v * self.0).round() as i32
    }
    fn upx(self, v: f64) -> u32 {
        (v * self.0).round().max(1.0) as u32
    }
    fn font(self, size: f64) -> TextStyle<'static> {
        TextStyle::from(("sans-serif", size * self.0).into_font()).color(&INK)
    }
    fn bold(self, size: f64) -> TextStyle<'static> {
        TextStyle::from(("sans-serif", size * self.0, FontStyle::Bold).into_font()).color(&INK)
    }
}

fn text<DB: DrawingBackend>(
    area: &Area<DB>,
    s: &str,
    at: (i32, i32),
    style: &TextStyle<'static>,
    anchor: (HPos, VPos),
) -> Result<(), String> {
    area.draw(&Text::new(
        s.to_string(),
        at,
        style.pos(Pos::new(anchor.0, anchor.1)),
    ))
    .map_err(de)
}

/// Break `s` into lines no wider than `max_w` pixels (at spaces).
fn wrap<DB: DrawingBackend>(
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
fn halo_text<DB: DrawingBackend>(
    area: &Area<DB>,
    s: &str,
    at: (i32, i32),
    style: &TextStyle<'static>,
    sc: Scale,
) -> Result<(), String> {
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
fn frame<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
    title: &str,
    caption: &[String],
) -> Result<Area<DB>, String> {
    let sc = Scale::of(ctx);
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
/// sharing its x axis with the one below).
fn chart<'a, DB: DrawingBackend>(
    area: &'a Area<DB>,
    sc: Scale,
    x: Axis,
    y: Axis,
    x_desc: Option<&str>,
    y_desc: &str,
) -> Result<Chart<'a, DB>, String> {
    let mut chart = ChartBuilder::on(area)
        .margin_top(sc.upx(12.0))
        .margin_right(sc.upx(40.0))
        .margin_left(sc.upx(16.0))
        .x_label_area_size(if x_desc.is_some() {
            sc.upx(72.0)
        } else {
            sc.upx(10.0)
        })
        .y_label_area_size(sc.upx(128.0))
        .build_cartesian_2d(x, y)
        .map_err(de)?;
    let blank = |_: &f64| String::new();
    let mut mesh = chart.configure_mesh();
    mesh.axis_desc_style(sc.font(27.0))
        .label_style(sc.font(23.0))
        .x_labels(9)
        .y_labels(7)
        .bold_line_style(GRID.mix(0.55))
        .light_line_style(TRANSPARENT)
        .axis_style(INK.stroke_width(sc.upx(1.6)))
        .y_desc(y_desc);
    match x_desc {
        Some(d) => {
            mesh.x_desc(d);
        }
        None => {
            mesh.x_label_formatter(&blank);
        }
    }
    mesh.draw().map_err(de)?;
    // Close the frame on top and right.
    chart
        .draw_series(std::iter::once(PathElement::new(
            vec![(x.lo, y.hi), (x.hi, y.hi), (x.hi, y.lo)],
            INK.mix(0.5).stroke_width(sc.upx(1.2)),
        )))
        .map_err(de)?;
    Ok(chart)
}

fn legend<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    sc: Scale,
    position: SeriesLabelPosition,
) -> Result<(), String> {
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
fn ring(sc: Scale) -> ShapeStyle {
    OUTLIER.stroke_width(sc.upx(2.2))
}

/// Scatter with error bars; points beyond the y range become triangles at the edge. Returns
/// how many points were beyond the range.
fn scatter<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    sc: Scale,
    points: &[(f64, f64, f64, bool)],
    x: Axis,
    y: Axis,
    point_label: Option<&str>,
) -> Result<usize, String> {
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

// ---------------------------------------------------------------------------------------------
// (a) Hubble diagram
// ---------------------------------------------------------------------------------------------

fn hubble<DB: DrawingBackend>(ctx: &Context<'_>, root: &Area<DB>) -> Result<(), String> {
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
    if !use_mu {
        caption.push("The table has no μ column: comoving distances D_C implied by the distance indicator are shown instead.".into());
    }
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
        "comoving distance D_C (Mpc)"
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
    legend(&mut top, sc, SeriesLabelPosition::UpperLeft)?;

    let r_desc = if use_mu {
        "μ − μ_model (mag)"
    } else {
        "D_C / D_C,model − 1"
    };
    let mut bottom = chart(
        &lower,
        sc,
        x,
        yr,
        Some("CMB-frame redshift z_cmb (log scale)"),
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
    // Running median of the residuals.
    let mut rm: Vec<(f64, [f64; 2])> = points
        .iter()
        .filter(|p| !p.3)
        .map(|p| (p.0.ln(), [p.4, 0.0]))
        .collect();
    let w = (rm.len() / 25).clamp(5, 120);
    let med = running_medians(&mut rm, w, (w / 5).max(1));
    if med.len() > 1 {
        let line: Vec<(f64, f64)> = med.iter().map(|m| (m.0.exp(), yr.clamp(m.1[0]))).collect();
        bottom
            .draw_series(std::iter::once(PathElement::new(
                line,
                ACCENT.stroke_width(sc.upx(4.0)),
            )))
            .map_err(de)?
            .label(format!("running median ({w} rows)"))
            .legend(move |(a, b)| {
                PathElement::new(
                    vec![(a - 12, b), (a + 12, b)],
                    ACCENT.stroke_width(sc.upx(4.0)),
                )
            });
    }
    legend(&mut bottom, sc, SeriesLabelPosition::LowerLeft)?;
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// (b) Velocity against distance
// ---------------------------------------------------------------------------------------------

fn velocity_distance<DB: DrawingBackend>(ctx: &Context<'_>, root: &Area<DB>) -> Result<(), String> {
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

// ---------------------------------------------------------------------------------------------
// (c) Sky map
// ---------------------------------------------------------------------------------------------

/// A direction to mark on the sky, in the map's frame.
struct Mark {
    lon: f64,
    lat: f64,
    label: String,
}

/// Bulk-flow direction and a description, in the map's frame, from the bulk-flow JSON.
fn bulk_flow_mark(json: &serde_json::Value, sky: SkyChoice) -> Option<Mark> {
    let f = |v: &serde_json::Value| v.as_f64();
    let (l, b) = match (json.get("l").and_then(f), json.get("b").and_then(f)) {
        (Some(l), Some(b)) => (l, b),
        _ => {
            let v = json.get("v_galactic")?.as_array()?;
            let (x, y, z) = (f(v.first()?)?, f(v.get(1)?)?, f(v.get(2)?)?);
            let r = (x * x + y * y + z * z).sqrt();
            if r <= 0.0 {
                return None;
            }
            (
                y.atan2(x).to_degrees().rem_euclid(360.0),
                (z / r).asin().to_degrees(),
            )
        }
    };
    let amplitude = json.get("amplitude").and_then(f);
    let err = json.get("amplitude_err").and_then(f);
    let speed = match (amplitude, err) {
        (Some(a), Some(e)) => format!("{} ± {} km/s ", fixed(a, 0), fixed(e, 0)),
        (Some(a), None) => format!("{} km/s ", fixed(a, 0)),
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

fn draw_star<DB: DrawingBackend>(
    area: &Area<DB>,
    sc: Scale,
    at: (i32, i32),
    size: f64,
) -> Result<(), String> {
    let pts = star(at, size * sc.0, size * 0.42 * sc.0);
    area.draw(&Polygon::new(pts.clone(), RGBColor(255, 200, 30).filled()))
        .map_err(de)?;
    let mut outline = pts;
    outline.push(outline[0]);
    area.draw(&PathElement::new(outline, INK.stroke_width(sc.upx(2.0))))
        .map_err(de)
}

fn draw_dipole<DB: DrawingBackend>(
    area: &Area<DB>,
    sc: Scale,
    at: (i32, i32),
    size: f64,
) -> Result<(), String> {
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

fn sky_map<DB: DrawingBackend>(
    ctx: &Context<'_>,
    root: &Area<DB>,
    sky: SkyChoice,
) -> Result<(), String> {
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
    text(
        &body,
        "v_pec (km/s)",
        (bx - sc.px(10.0), bar_top - sc.px(40.0)),
        &sc.font(23.0),
        (HPos::Left, VPos::Center),
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

// ---------------------------------------------------------------------------------------------
// (d) Normalised velocities
// ---------------------------------------------------------------------------------------------

fn pulls<DB: DrawingBackend>(ctx: &Context<'_>, root: &Area<DB>) -> Result<(), String> {
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
    c.draw_series(std::iter::empty::<PathElement<(f64, f64)>>())
        .map_err(de)?
        .label(stats_text)
        .legend(|(a, b)| EmptyElement::at((a, b)));
    legend(&mut c, sc, SeriesLabelPosition::UpperLeft)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round() {
        assert_eq!(
            Axis::linear(0.0, 10.0).ticks(6),
            vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]
        );
        let t = Axis::log(0.003, 0.1).ticks(9);
        assert_eq!(t.len(), 7, "{t:?}");
        assert!((t[0] - 0.003).abs() < 1e-12 && (t[6] - 0.1).abs() < 1e-12);
        assert_eq!(number(0.30000000000000004), "0.3");
        assert_eq!(number(-1500.0), "−1500");
        assert_eq!(number(0.003), "0.003");
        assert_eq!(nice_ceil(2710.0), 3000.0);
    }

    #[test]
    fn running_median_follows_a_line() {
        let mut p: Vec<(f64, [f64; 2])> = (0..101)
            .map(|i| (i as f64, [2.0 * i as f64, 1.0]))
            .collect();
        let m = running_medians(&mut p, 11, 5);
        assert!(m.len() > 5);
        for (x, v) in m {
            assert!((v[0] - 2.0 * x).abs() < 1e-9 && v[1] == 1.0);
        }
    }

    #[test]
    fn clipping_keeps_inside_pieces() {
        let y = Axis::linear(-1.0, 1.0);
        let pts = vec![(0.0, -3.0), (1.0, 0.0), (2.0, 3.0), (3.0, 0.5), (4.0, 0.0)];
        let pieces = clip_curve(&pts, &y);
        assert_eq!(pieces.len(), 2);
        for p in pieces.iter().flatten() {
            assert!(p.1 >= -1.0 && p.1 <= 1.0);
        }
    }
}
