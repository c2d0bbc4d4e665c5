//! Figures and a one-file run report from a flowsift output table.
//!
//! [`render_all`] draws, from the rows whose `status` is `ok`:
//! * `hubble_diagram` — μ (or D_C when the table has no `mu`) against z_cmb with the model
//!   curve of the chosen cosmology, and the residuals from it below;
//! * `velocity_distance` — v_pec against D_C with error bars and running statistics;
//! * `sky_galactic` / `sky_supergalactic` — an equal-area (Mollweide) map of v_pec on a
//!   diverging colour scale, with the bulk-flow and CMB-dipole directions;
//! * `velocity_pulls` — the histogram of v_pec/σ_v (or (v_pec − true_v_pec)/σ_v for mocks)
//!   against a unit normal.
//!
//! Outliers (`outlier` true) are open green markers in every figure, and each caption says how
//! many rows were used and left out. Each figure is written as PNG and/or SVG
//! (1600 × 1000 px by default). PNG text is rendered from the bundled DejaVu Sans (no system
//! fonts are read); SVG text names the generic `sans-serif` family.
//!
//! [`write_report`] writes a single self-contained HTML file: input, settings and
//! conventions from the provenance, counts per status, outliers per reason, the bulk flow and
//! its ΛCDM comparison, and every figure embedded.
//!
//! Nothing here prints; errors come back as a [`ReportError`] naming what failed.

pub mod binned;
pub mod cell_means;
pub mod colour;
mod data;
mod error;
mod figures;
mod html;
mod pdf;
pub mod projection;
pub mod sky_cells;
mod tables;

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use crate::catalogue::Table;
use crate::flow::bulk_flow_report::BulkFlowReport;
use crate::physics::cosmology::{Cosmology, CosmologyParams};

pub use error::ReportError;
pub use html::write_report;

/// Which sky coordinates the map uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum SkyChoice {
    /// Galactic (l, b), from the `glon`, `glat` columns.
    #[default]
    Galactic,
    /// Supergalactic (SGL, SGB), from the `sgl`, `sgb` columns.
    Supergalactic,
}

impl SkyChoice {
    /// Lower-case name, as used in file names.
    pub fn name(self) -> &'static str {
        match self {
            SkyChoice::Galactic => "galactic",
            SkyChoice::Supergalactic => "supergalactic",
        }
    }
}

/// Which image files to write for each figure.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ImageFormat {
    Png,
    Svg,
    Pdf,
    /// PNG and SVG.
    #[default]
    Both,
    /// PDF, SVG and PNG.
    All,
}

impl ImageFormat {
    fn extensions(self) -> &'static [&'static str] {
        match self {
            ImageFormat::Png => &["png"],
            ImageFormat::Svg => &["svg"],
            ImageFormat::Pdf => &["pdf"],
            ImageFormat::Both => &["png", "svg"],
            ImageFormat::All => &["pdf", "svg", "png"],
        }
    }
}

/// How the figures look.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Style {
    /// For reading on a screen: title and caption inside the image, sizes in pixels.
    #[default]
    Screen,
    /// For a journal: no title or caption inside the image (the caption goes to
    /// `NAME.caption.txt`), the width of a journal column, sizes in points (PNG at 300 dpi).
    Paper,
}

/// Journal column width of a paper-style figure.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PaperColumn {
    /// 3.5 in (252 pt), one column of a two-column journal page (common practice: ApJ 3.5 in,
    /// A&A 88 mm, MNRAS 84 mm; from memory).
    Single,
    /// 7.1 in (511 pt), the full width of a two-column page (ApJ 7.1 in, A&A 180 mm, MNRAS
    /// 174 mm; from memory).
    Double,
}

impl PaperColumn {
    /// Width in points (1/72 in).
    pub fn width_pt(self) -> f64 {
        match self {
            PaperColumn::Single => 252.0,
            PaperColumn::Double => 511.0,
        }
    }
}

/// What to draw and how.
#[derive(Debug, Clone)]
pub struct PlotOptions {
    /// Coordinates of the sky maps.
    pub sky: SkyChoice,
    /// Image files of each figure.
    pub format: ImageFormat,
    /// The bulk-flow result (`OUTPUT.bulkflow.json`, read by
    /// `catalogue::bulk_flow_file::read_bulk_flow`), for the direction on the sky maps and the
    /// bulk-flow figure; without it the maps say that no bulk flow is marked and there is no
    /// bulk-flow figure.
    pub bulkflow: Option<BulkFlowReport>,
    /// Cosmology of the model curve and of redshift distances (see [`PlotOptions::for_run`] for
    /// the run's own; default flat ΛCDM, H0 = 70, Ω_m = 0.3).
    pub cosmology: CosmologyParams,
    /// Where `cosmology` came from, for the captions.
    pub cosmology_source: String,
    /// The distance-modulus column (and its error column) when the table has no `mu`: the
    /// one the run's record maps to μ (see [`PlotOptions::for_run`]).
    pub mu_column: Option<(String, Option<String>)>,
    /// Also draw v_pec against the distance inferred from the distance indicator (biased: see
    /// the figure's caption).
    pub inferred_distance: bool,
    /// Screen or paper.
    pub style: Style,
    /// Paper style: the column width of every figure (None: sky maps double, others single).
    pub column: Option<PaperColumn>,
    /// Screen style: figure size in pixels (SVG: the same size in user units).
    pub width: u32,
    pub height: u32,
    /// A short name of the sample for the figure titles (e.g. the input file name).
    pub label: Option<String>,
}

impl Default for PlotOptions {
    fn default() -> Self {
        PlotOptions {
            sky: SkyChoice::Galactic,
            format: ImageFormat::Both,
            bulkflow: None,
            cosmology: CosmologyParams::flat_lcdm(70.0, 0.3),
            cosmology_source: "plot default, not the run's: flat ΛCDM, H0 = 70 km/s/Mpc, Ω_m = 0.3 (common practice)".into(),
            mu_column: None,
            inferred_distance: false,
            style: Style::Screen,
            column: None,
            width: 1600,
            height: 1000,
            label: None,
        }
    }
}

/// What the run that wrote a table recorded that the figures need.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RunFigureSettings {
    /// The run's cosmology, when its record has one.
    pub cosmology: Option<CosmologyParams>,
    /// The column the run read as distance modulus, and its error column, when it was named
    /// (not the default `mu`).
    pub mu_column: Option<(String, Option<String>)>,
}

/// The run's cosmology and distance-modulus column from the record beside or inside `input`
/// (nothing when there is no record).
pub fn run_figure_settings(input: &Path, hdu: Option<&str>) -> RunFigureSettings {
    let Ok(found) = crate::catalogue::read_provenance(input, hdu) else {
        return RunFigureSettings::default();
    };
    let Ok(Some(record)) = crate::catalogue::RunRecord::from_provenance(&found.provenance) else {
        return RunFigureSettings::default();
    };
    from_record(&record)
}

/// [`run_figure_settings`] from a record already read.
pub fn from_record(record: &crate::catalogue::RunRecord) -> RunFigureSettings {
    use crate::physics::estimators::DistanceKind;
    let cosmology = record.settings.cosmology.resolve().ok().map(|c| c.params);
    let cols = &record.settings.columns;
    let mu_column = match (&cols.distance, cols.distance_kind) {
        (Some(name), Some(DistanceKind::Mu) | None) if name != "mu" => {
            Some((name.clone(), cols.distance_err.clone()))
        }
        _ => None,
    };
    RunFigureSettings {
        cosmology,
        mu_column,
    }
}

impl PlotOptions {
    /// Options with the cosmology and the distance-modulus column of the run that wrote
    /// `input` (from its record), else the defaults.
    pub fn for_run(input: &Path, hdu: Option<&str>) -> PlotOptions {
        PlotOptions::default().with_run(&run_figure_settings(input, hdu))
    }

    /// These options with the run's cosmology and distance-modulus column.
    pub fn with_run(mut self, run: &RunFigureSettings) -> PlotOptions {
        if let Some(c) = run.cosmology {
            self.cosmology = c;
            self.cosmology_source = "the run's, from its record".into();
        }
        if run.mu_column.is_some() {
            self.mu_column = run.mu_column.clone();
        }
        self
    }
}

/// The figures, in the order they are drawn; `stem` is the file name without extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Figure {
    Hubble,
    VelocityDistance,
    VelocityInferred,
    Sky(SkyChoice),
    FlowMap(SkyChoice),
    BulkFlow,
    Pulls,
}

impl Figure {
    pub(crate) fn stem(self) -> &'static str {
        match self {
            Figure::Hubble => "hubble_diagram",
            Figure::VelocityDistance => "velocity_distance",
            Figure::VelocityInferred => "velocity_inferred_distance",
            Figure::Sky(SkyChoice::Galactic) => "sky_galactic",
            Figure::Sky(SkyChoice::Supergalactic) => "sky_supergalactic",
            Figure::FlowMap(SkyChoice::Galactic) => "flow_map_galactic",
            Figure::FlowMap(SkyChoice::Supergalactic) => "flow_map_supergalactic",
            Figure::BulkFlow => "bulk_flow",
            Figure::Pulls => "velocity_pulls",
        }
    }

    pub(crate) fn from_stem(stem: &str) -> Option<Figure> {
        [
            Figure::Hubble,
            Figure::VelocityDistance,
            Figure::VelocityInferred,
            Figure::Sky(SkyChoice::Galactic),
            Figure::Sky(SkyChoice::Supergalactic),
            Figure::FlowMap(SkyChoice::Galactic),
            Figure::FlowMap(SkyChoice::Supergalactic),
            Figure::BulkFlow,
            Figure::Pulls,
        ]
        .into_iter()
        .find(|f| f.stem() == stem)
    }

    /// A one-line description for the report.
    pub(crate) fn describe(self) -> &'static str {
        match self {
            Figure::Hubble => "Hubble diagram: distance indicator against CMB-frame redshift, the model curve, and the residuals from it.",
            Figure::VelocityDistance => "Peculiar velocity against redshift distance D_C(z_cmb), with error-weighted means in bins (the η means are in the data table).",
            Figure::VelocityInferred => "Peculiar velocity against the distance inferred from the distance indicator: biased by construction (objects scattered far get negative velocities).",
            Figure::Sky(SkyChoice::Galactic) => "Peculiar velocities of single objects on the sky, Galactic coordinates (Mollweide equal-area projection).",
            Figure::Sky(SkyChoice::Supergalactic) => "Peculiar velocities of single objects on the sky, supergalactic coordinates (Mollweide equal-area projection).",
            Figure::FlowMap(SkyChoice::Galactic) => "Flow map: error-weighted mean velocity in equal-area sky cells and redshift shells, with the dipole fitted to the cells, Galactic coordinates.",
            Figure::FlowMap(SkyChoice::Supergalactic) => "Flow map: error-weighted mean velocity in equal-area sky cells and redshift shells, with the dipole fitted to the cells, supergalactic coordinates.",
            Figure::BulkFlow => "Bulk flow: the measured components with errors against the ΛCDM expectation for the sample's window, and the flow of subsamples limited in depth.",
            Figure::Pulls => "Velocities in units of their errors, against a unit normal.",
        }
    }

    /// Paper style: the column width and the height over the width.
    fn paper_shape(self, column: Option<PaperColumn>) -> (PaperColumn, f64) {
        let (own, aspect) = match self {
            Figure::Sky(_) => (PaperColumn::Double, 0.62),
            Figure::FlowMap(_) => (PaperColumn::Double, 0.66),
            Figure::Hubble | Figure::VelocityDistance | Figure::VelocityInferred => {
                (PaperColumn::Single, 0.95)
            }
            Figure::BulkFlow => (PaperColumn::Single, 1.1),
            Figure::Pulls => (PaperColumn::Single, 0.8),
        };
        (column.unwrap_or(own), aspect)
    }
}

/// The drawing surface of one file: size in backend units and the factor on the reference
/// sizes of the layout (which are pixels of a 1000 px high screen figure).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Canvas {
    pub width: u32,
    pub height: u32,
    pub scale: f64,
}

/// Paper style: point sizes relative to the screen layout's reference pixels (tick labels
/// 23 px → 7 pt).
const PAPER_SCALE: f64 = 7.0 / 23.0;
/// Paper-style PNG resolution, dots per inch.
const PAPER_DPI: f64 = 300.0;

impl Canvas {
    pub(crate) fn of(figure: Figure, options: &PlotOptions, ext: &str) -> Canvas {
        match options.style {
            Style::Screen => Canvas {
                width: options.width,
                height: options.height,
                scale: options.height as f64 / 1000.0,
            },
            Style::Paper => {
                let (column, aspect) = figure.paper_shape(options.column);
                let w = column.width_pt();
                let h = (w * aspect).round();
                let k = if ext == "png" { PAPER_DPI / 72.0 } else { 1.0 };
                Canvas {
                    width: (w * k).round() as u32,
                    height: (h * k).round() as u32,
                    scale: PAPER_SCALE * k,
                }
            }
        }
    }
}

/// Register the bundled font with plotters, once per process.
pub(crate) fn register_fonts() -> Result<(), ReportError> {
    static LOADED: OnceLock<bool> = OnceLock::new();
    let loaded = LOADED.get_or_init(|| {
        use plotters::style::FontStyle;
        let faces: [(FontStyle, &'static [u8]); 3] = [
            (FontStyle::Normal, dejavu::sans::regular()),
            (FontStyle::Bold, dejavu::sans::bold()),
            (FontStyle::Italic, dejavu::sans::oblique()),
        ];
        for (style, bytes) in faces {
            if plotters::style::register_font("sans-serif", style, bytes).is_err() {
                return false;
            }
        }
        true
    });
    if *loaded {
        Ok(())
    } else {
        Err(ReportError::Font)
    }
}

/// Draw every figure of `table` into `out_dir` (created if needed; existing figure files are
/// replaced) and return the paths written: for each figure its images (in the order of the
/// format), its data table `NAME.data.csv` and, in paper style, its caption `NAME.caption.txt`.
pub fn render_all(
    table: &Table,
    options: &PlotOptions,
    out_dir: &Path,
) -> Result<Vec<PathBuf>, ReportError> {
    if options.style == Style::Screen && (options.width < 400 || options.height < 300) {
        return Err(ReportError::FigureSize {
            width: options.width,
            height: options.height,
        });
    }
    register_fonts()?;
    std::fs::create_dir_all(out_dir)
        .map_err(|e| ReportError::file(out_dir, format!("cannot create the folder: {e}")))?;
    let mut sample = data::Sample::from_table(table, options.sky, options.mu_column.as_ref())?;
    let cosmology = Cosmology::new(options.cosmology).map_err(ReportError::ModelCosmology)?;
    sample.fill_depths(&cosmology);
    let mut list = vec![Figure::Hubble, Figure::VelocityDistance];
    if options.inferred_distance {
        list.push(Figure::VelocityInferred);
    }
    list.push(Figure::FlowMap(options.sky));
    list.push(Figure::Sky(options.sky));
    if options.bulkflow.is_some() {
        list.push(Figure::BulkFlow);
    }
    list.push(Figure::Pulls);
    let mut written = Vec::new();
    for figure in list {
        let record = std::cell::RefCell::new(figures::FigureRecord::default());
        for ext in options.format.extensions() {
            let path = out_dir.join(format!("{}.{ext}", figure.stem()));
            let ctx = figures::Context {
                sample: &sample,
                cosmology: &cosmology,
                options,
                canvas: Canvas::of(figure, options, ext),
                record: &record,
            };
            figures::write_figure(figure, &ctx, &path)
                .map_err(|e| ReportError::output(&path, e))?;
            written.push(path);
        }
        let record = record.into_inner();
        if let Some(t) = &record.table {
            let path = out_dir.join(format!("{}.data.csv", figure.stem()));
            tables::write_csv(&path, t).map_err(|e| ReportError::output(&path, e))?;
            written.push(path);
        }
        if options.style == Style::Paper {
            let path = out_dir.join(format!("{}.caption.txt", figure.stem()));
            let mut text = String::new();
            if !record.title.is_empty() {
                text.push_str(&record.title);
                text.push_str(". ");
            }
            text.push_str(&record.caption.join(" "));
            text.push('\n');
            crate::catalogue::atomic::write_bytes(&path, text.as_bytes())
                .map_err(|e| ReportError::output(&path, e.into()))?;
            written.push(path);
        }
    }
    Ok(written)
}
