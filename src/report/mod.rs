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

pub mod colour;
mod data;
mod error;
mod figures;
mod html;
pub mod projection;

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
    /// PNG and SVG.
    #[default]
    Both,
}

impl ImageFormat {
    fn extensions(self) -> &'static [&'static str] {
        match self {
            ImageFormat::Png => &["png"],
            ImageFormat::Svg => &["svg"],
            ImageFormat::Both => &["png", "svg"],
        }
    }
}

/// What to draw and how.
#[derive(Debug, Clone)]
pub struct PlotOptions {
    /// Coordinates of the sky map.
    pub sky: SkyChoice,
    /// PNG, SVG or both.
    pub format: ImageFormat,
    /// The bulk-flow result (`OUTPUT.bulkflow.json`, read by
    /// `catalogue::bulk_flow_file::read_bulk_flow`), for the direction on the sky map; without
    /// it the map says that no bulk flow is marked.
    pub bulkflow: Option<BulkFlowReport>,
    /// Cosmology of the model curve in the Hubble diagram (default flat ΛCDM, H0 = 70, Ω_m = 0.3).
    pub cosmology: CosmologyParams,
    /// Figure size in pixels (SVG: the same size in user units).
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
            width: 1600,
            height: 1000,
            label: None,
        }
    }
}

/// The figures, in the order they are drawn; `stem` is the file name without extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Figure {
    Hubble,
    VelocityDistance,
    Sky(SkyChoice),
    Pulls,
}

impl Figure {
    pub(crate) fn stem(self) -> &'static str {
        match self {
            Figure::Hubble => "hubble_diagram",
            Figure::VelocityDistance => "velocity_distance",
            Figure::Sky(SkyChoice::Galactic) => "sky_galactic",
            Figure::Sky(SkyChoice::Supergalactic) => "sky_supergalactic",
            Figure::Pulls => "velocity_pulls",
        }
    }

    pub(crate) fn from_stem(stem: &str) -> Option<Figure> {
        [
            Figure::Hubble,
            Figure::VelocityDistance,
            Figure::Sky(SkyChoice::Galactic),
            Figure::Sky(SkyChoice::Supergalactic),
            Figure::Pulls,
        ]
        .into_iter()
        .find(|f| f.stem() == stem)
    }

    /// A one-line description for the report.
    pub(crate) fn describe(self) -> &'static str {
        match self {
            Figure::Hubble => "Hubble diagram: distance indicator against CMB-frame redshift, the model curve, and the residuals from it.",
            Figure::VelocityDistance => "Peculiar velocity against comoving distance, with errors and running statistics.",
            Figure::Sky(SkyChoice::Galactic) => "Peculiar velocities on the sky, Galactic coordinates (Mollweide equal-area projection).",
            Figure::Sky(SkyChoice::Supergalactic) => "Peculiar velocities on the sky, supergalactic coordinates (Mollweide equal-area projection).",
            Figure::Pulls => "Velocities in units of their errors, against a unit normal.",
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
/// replaced) and return the paths written, PNG before SVG for each figure.
pub fn render_all(
    table: &Table,
    options: &PlotOptions,
    out_dir: &Path,
) -> Result<Vec<PathBuf>, ReportError> {
    if options.width < 400 || options.height < 300 {
        return Err(ReportError::FigureSize {
            width: options.width,
            height: options.height,
        });
    }
    register_fonts()?;
    std::fs::create_dir_all(out_dir)
        .map_err(|e| ReportError::file(out_dir, format!("cannot create the folder: {e}")))?;
    let sample = data::Sample::from_table(table, options.sky)?;
    let cosmology = Cosmology::new(options.cosmology).map_err(ReportError::ModelCosmology)?;
    let context = figures::Context {
        sample: &sample,
        cosmology: &cosmology,
        options,
    };
    let mut written = Vec::new();
    for figure in [
        Figure::Hubble,
        Figure::VelocityDistance,
        Figure::Sky(options.sky),
        Figure::Pulls,
    ] {
        for ext in options.format.extensions() {
            let path = out_dir.join(format!("{}.{ext}", figure.stem()));
            figures::write_figure(figure, &context, &path)
                .map_err(|e| ReportError::output(&path, e))?;
            written.push(path);
        }
    }
    Ok(written)
}
