//! Velocity-field files: flowsift's own FITS image format, and plain tables of grid points.
//!
//! [`read_field`] reads either form into a [`VelocityGrid`]; [`write_field_fits`] writes the
//! FITS form and [`write_field_table`] the table form. The physics of the grid (cell
//! centres, interpolation) is in [`crate::physics::field`].
//!
//! # FITS form (this section is the specification)
//!
//! A FITS file (plain, or gzip-compressed with a `.gz` name) holding the three Cartesian
//! velocity components as three 3-D images.
//!
//! **HDU 0, primary**: no data (`NAXIS = 0`). Cards:
//!
//! | card       | type    | value                                                     |
//! |------------|---------|-----------------------------------------------------------|
//! | `FS_FORM`  | string  | `'FLOWSIFT VELOCITY GRID'` (informational)                |
//! | `FS_VERS`  | integer | format version, `1`                                       |
//! | geometry   |         | the cards of the table below                              |
//!
//! **HDUs 1, 2, 3**: IMAGE extensions with `EXTNAME = 'VX'`, `'VY'`, `'VZ'` (in that order),
//! `BITPIX = -64`, `NAXIS = 3`, `NAXIS1 = n_x`, `NAXIS2 = n_y`, `NAXIS3 = n_z`; pixel
//! [i+1, j+1, k+1] (FITS counts from 1, x fastest) is the velocity component of cell
//! (i, j, k), in km/s. Each image carries `BUNIT = 'km/s'` and the geometry cards:
//!
//! | card                 | type   | value                                                     |
//! |----------------------|--------|-----------------------------------------------------------|
//! | `FS_ORIG1..3`        | real   | x, y, z of the centre of cell (0, 0, 0) (pixel [1, 1, 1]), in `FS_LUNIT` |
//! | `FS_CELL`            | real   | distance between neighbouring cell centres, > 0, the same on all three axes, in `FS_LUNIT` |
//! | `FS_AXES`            | string | `'SUPERGALACTIC'` or `'GALACTIC'` ([`FieldAxes`])        |
//! | `FS_LUNIT`           | string | `'Mpc'` or `'Mpc/h'` (h⁻¹ Mpc)                            |
//!
//! Cell (i, j, k) is centred at (FS_ORIG1 + i·FS_CELL, FS_ORIG2 + j·FS_CELL,
//! FS_ORIG3 + k·FS_CELL). Reals are written with 17 significant digits, so they read back
//! exactly. The writer also puts a linear WCS on each image for viewers (`CTYPEi` = `'SGX'`,
//! `'SGY'`, `'SGZ'` or `'GX'`, `'GY'`, `'GZ'`, `CRPIXi = 1`, `CRVALi = FS_ORIGi`,
//! `CDELTi = FS_CELL`, and `CUNITi = 'Mpc'` when the unit is Mpc); readers ignore it.
//! Every velocity must be finite. (Files written before the cell-size card was renamed carry
//! it as `FS_SPACE`; readers accept both.)
//!
//! **Reading** finds the three images by `EXTNAME` (any case; `HDUNAME` also matches, as
//! cfitsio does), wherever they are — so a file whose primary array is `VX` is read too —
//! and ignores other HDUs. Any `BITPIX` is accepted and converted to float64 (with `BSCALE`
//! / `BZERO` applied). Each card is looked up in the component's own header first, then in
//! the primary header. Required: `FS_ORIG1..3`, `FS_CELL` and `BUNIT` (`'km/s'`, or
//! `'km s-1'`, `'km.s-1'`); `FS_AXES` and `FS_LUNIT` are required unless the caller supplies
//! them (an `axes_hint` / `unit_hint`), and a hint that contradicts a card is an error.
//! The three images must have the same shape and geometry. `FS_VERS` above 1 is refused.
//! Every error names the file, the HDU and the card or pixel.
//!
//! # Density-contrast FITS form
//!
//! [`read_density`] also reads a density contrast δ = ρ/ρ̄ − 1 as one 3-D image with
//! `EXTNAME = 'DELTA'` (found wherever it is, as above; any `BITPIX`), pixel [i+1, j+1, k+1]
//! being δ of cell (i, j, k), with the same geometry cards (`FS_ORIG1..3`, `FS_CELL`,
//! `FS_AXES`, `FS_LUNIT`, on the image or the primary header; hints as above). `BUNIT` may
//! be absent or dimensionless (`''` or `'1'`); any other unit is refused. Every δ must be
//! finite and above −1.
//!
//! # Table form
//!
//! Any table [`read_table`] reads (CSV, TSV, Parquet, or a FITS binary table — a FITS file
//! without a `VX` image): columns `x`, `y`, `z` (position, any case) and `vx`, `vy`, `vz`
//! (km/s), one row per grid point, rows in any order; other columns are ignored. The points
//! must form a complete regular grid with cubic cells: origin, spacing and shape are
//! inferred, and every point of the box they span must appear exactly once. A position
//! within 10⁻³ cell of a lattice point counts as on it (values differing by less than 10⁻⁶
//! of the largest coordinate are taken as equal while the spacing is estimated). Errors name
//! the first offending row (rows count from 1, header excluded) or the first missing point.
//!
//! Axes and length unit are not in the table: they come from the caller (`axes_hint`,
//! `unit_hint`), defaulting to supergalactic and Mpc. Where the table carries column units
//! (FITS `TUNITn`, Parquet metadata), `x`/`y`/`z` in Mpc or Mpc/h set the unit (a
//! contradicting hint is an error) and `vx`/`vy`/`vz` must be km/s.

use std::ffi::{CStr, CString};
use std::os::raw::{c_char, c_int, c_void};
use std::path::Path;
use std::ptr;

use fitsio::sys;
use polars::prelude::*;

use super::cfitsio::{ok, status_text, FitsHandle};
use super::{
    read_table, write_table, CatalogueError, ColumnMeta, Format, Provenance, ReadOptions, Table,
    WriteOptions,
};
use crate::physics::cosmology::LengthUnit;
use crate::physics::field::{FieldAxes, VelocityGrid};

/// `EXTNAME`s of the three velocity images, x, y, z.
pub const EXTNAMES: [&str; 3] = ["VX", "VY", "VZ"];
/// `EXTNAME` of a density-contrast image.
pub const DENSITY_EXTNAME: &str = "DELTA";
/// Value of the `FS_FORM` card.
pub const FORMAT_NAME: &str = "FLOWSIFT VELOCITY GRID";
/// Value of the `FS_VERS` card that this module writes; the highest it reads.
pub const FORMAT_VERSION: i64 = 1;
/// Distance, in cells, within which a table point counts as on the lattice.
pub const LATTICE_TOLERANCE_CELLS: f64 = 1e-3;

const ORIGIN_KEYS: [&str; 3] = ["FS_ORIG1", "FS_ORIG2", "FS_ORIG3"];
const TABLE_COLUMNS: [&str; 6] = ["x", "y", "z", "vx", "vy", "vz"];

// cfitsio constants.
const IMAGE_HDU: c_int = 0;
const ANY_HDU: c_int = -1;
const BYTE_IMG: c_int = 8;
const DOUBLE_IMG: c_int = -64;
const TDOUBLE: c_int = 82;
const KEY_NO_EXIST: c_int = 202;
const BAD_HDU_NUM: c_int = 301;
const FLEN_VALUE: usize = 71;
/// Values per cfitsio write call.
const WRITE_CHUNK: usize = 1 << 16;

// ---------------------------------------------------------------------------------------------
// Public API
// ---------------------------------------------------------------------------------------------

/// Read a velocity field: the FITS image form if the file is FITS and holds a `VX` image,
/// otherwise the table form (see the [module documentation](self)). The format is chosen
/// by extension (`.fits`/`.fit`/`.fts`, optionally `.gz`; `.csv`; `.tsv`; `.parquet`/`.pq`)
/// and, for FITS, by content. Hints fill in (or must agree with) the axes and length unit.
pub fn read_field(
    path: &Path,
    axes_hint: Option<FieldAxes>,
    unit_hint: Option<LengthUnit>,
) -> Result<VelocityGrid, CatalogueError> {
    let err = |m: String| CatalogueError::read(path, m);
    if let Some(file) = fits_with_image(path, EXTNAMES[0])? {
        return read_image_form(&file, axes_hint, unit_hint).map_err(err);
    }
    let table = read_table(path, &ReadOptions::default())?;
    grid_from_table(&table, axes_hint, unit_hint).map_err(err)
}

/// A density-contrast grid δ: the FITS image form if the file is FITS and holds a `DELTA`
/// image (see the [module documentation](self)), otherwise a table with columns `x`, `y`,
/// `z`, `delta` on a regular grid (the same rules as the table form of a velocity field).
/// Returned as a grid whose first component holds δ (the other two are zero), so the
/// geometry travels with it.
pub fn read_density(
    path: &Path,
    axes_hint: Option<FieldAxes>,
    unit_hint: Option<LengthUnit>,
) -> Result<VelocityGrid, CatalogueError> {
    let err = |m: String| CatalogueError::read(path, m);
    let grid = match fits_with_image(path, DENSITY_EXTNAME)? {
        Some(file) => read_density_image(&file, axes_hint, unit_hint).map_err(err)?,
        None => read_density_table(path, axes_hint, unit_hint)?,
    };
    if let Some(idx) = grid.v[0].iter().position(|d| !(d.is_finite() && *d > -1.0)) {
        let [nx, ny, _] = grid.shape;
        let cell = [idx % nx, (idx / nx) % ny, idx / (nx * ny)];
        let at = |a: usize| grid.origin[a] + cell[a] as f64 * grid.spacing;
        return Err(err(format!(
            "the grid point at x = {}, y = {}, z = {} has δ = {}; a density contrast must be \
             finite and above −1",
            at(0),
            at(1),
            at(2),
            grid.v[0][idx]
        )));
    }
    Ok(grid)
}

/// The open file when `path` is a FITS file with an HDU named `extname`; `None` for any
/// other file (read as a table then). A missing file is an error.
fn fits_with_image(path: &Path, extname: &str) -> Result<Option<FitsHandle>, CatalogueError> {
    if !path.exists() {
        return Err(CatalogueError::read(path, "no such file"));
    }
    if Format::from_path(path)? != Format::Fits {
        return Ok(None);
    }
    let err = |m: String| CatalogueError::read(path, m);
    let file = FitsHandle::open(path).map_err(err)?;
    Ok(file.find_hdu(extname).map_err(err)?.map(|_| file))
}

/// The table form of [`read_density`].
fn read_density_table(
    path: &Path,
    axes_hint: Option<FieldAxes>,
    unit_hint: Option<LengthUnit>,
) -> Result<VelocityGrid, CatalogueError> {
    let err = |m: String| CatalogueError::read(path, m);
    let table = read_table(path, &ReadOptions::default())?;
    let (name, delta) = table_column(&table, "delta").map_err(err)?;
    let n = delta.len();
    let mut frame = table.frame.clone();
    frame = frame.drop(&name).map_err(|e| err(e.to_string()))?;
    for c in ["vx", "vy", "vz"] {
        if frame.column(c).is_ok() {
            frame = frame.drop(c).map_err(|e| err(e.to_string()))?;
        }
    }
    let zeros = vec![0.0; n];
    frame = frame
        .hstack(&[
            polars::prelude::Column::new("vx".into(), delta),
            polars::prelude::Column::new("vy".into(), zeros.clone()),
            polars::prelude::Column::new("vz".into(), zeros),
        ])
        .map_err(|e| err(e.to_string()))?;
    grid_from_table(&Table::new(frame, table.meta.clone()), axes_hint, unit_hint).map_err(err)
}

/// Write `grid` as a FITS field file (the [FITS form](self)). Atomic: the file is built under
/// a temporary name in the destination's folder and renamed over `path`, replacing any file
/// there (the caller decides whether that is allowed). A name ending in `.gz` gives a
/// gzip-compressed file. Refuses grids that fail [`VelocityGrid::check`] or hold non-finite
/// velocities.
pub fn write_field_fits(path: &Path, grid: &VelocityGrid) -> Result<(), CatalogueError> {
    let err = |m: String| CatalogueError::write(path, m);
    if !matches!(Format::from_path(path), Ok(Format::Fits)) {
        return Err(err(
            "a FITS field file needs a .fits, .fit or .fts name (optionally with .gz)".into(),
        ));
    }
    grid.check().map_err(|e| err(e.to_string()))?;
    grid.check_values().map_err(|e| err(e.to_string()))?;
    if path.is_dir() {
        return Err(err("is a folder".into()));
    }
    let compress = path
        .file_name()
        .map(|n| n.to_string_lossy().to_ascii_lowercase().ends_with(".gz"))
        .unwrap_or(false);
    super::atomic::write_via_path(path, |tmp| {
        FitsHandle::create(tmp, compress).and_then(|file| {
            write_image_form(&file, grid)?;
            file.close()
                .map_err(|s| format!("cannot finish writing the file: {}", status_text(s)))
        })
    })
}

/// The table form of a grid: columns x, y, z (cell centres, in the grid's length unit) and
/// vx, vy, vz (km/s), one row per cell, x fastest; units and UCDs in the metadata.
pub fn grid_table(grid: &VelocityGrid) -> Result<Table, CatalogueError> {
    let n = grid.len();
    let mut pos = [
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
    ];
    for idx in 0..n {
        let [i, j, k] = grid.cell_of(idx);
        let c = grid.cell_centre(i, j, k);
        for a in 0..3 {
            pos[a].push(c[a]);
        }
    }
    let unit = grid.length_unit.label();
    let ucds = [
        "pos.cartesian.x",
        "pos.cartesian.y",
        "pos.cartesian.z",
        "phys.veloc;pos.cartesian.x",
        "phys.veloc;pos.cartesian.y",
        "phys.veloc;pos.cartesian.z",
    ];
    let values = [
        &pos[0], &pos[1], &pos[2], &grid.v[0], &grid.v[1], &grid.v[2],
    ];
    let mut columns = Vec::with_capacity(6);
    let mut meta = std::collections::BTreeMap::new();
    for (c, name) in TABLE_COLUMNS.iter().enumerate() {
        columns.push(
            Float64Chunked::from_vec((*name).into(), values[c].to_vec())
                .into_series()
                .into_column(),
        );
        meta.insert(
            name.to_string(),
            ColumnMeta {
                unit: Some(if c < 3 { unit } else { "km/s" }.to_string()),
                ucd: Some(ucds[c].to_string()),
                description: None,
            },
        );
    }
    let frame = DataFrame::new(n, columns)
        .map_err(|e| CatalogueError::write(Path::new("<field table>"), e.to_string()))?;
    Ok(Table::new(frame, meta))
}

/// Write the table form of `grid` (any format [`write_table`] writes, with its atomic
/// write and `options`). Axes and length unit go into the provenance (and column units);
/// pass them back as hints when reading a CSV/TSV.
pub fn write_field_table(
    path: &Path,
    grid: &VelocityGrid,
    options: &WriteOptions,
) -> Result<(), CatalogueError> {
    grid.check()
        .map_err(|e| CatalogueError::write(path, e.to_string()))?;
    let table = grid_table(grid).map_err(|e| match e {
        CatalogueError::Read { message, .. } | CatalogueError::Write { message, .. } => {
            CatalogueError::write(path, message)
        }
    })?;
    let provenance = Provenance {
        entries: vec![
            ("field_axes".into(), grid.axes.name().into()),
            ("field_length_unit".into(), grid.length_unit.label().into()),
            ("field_spacing".into(), format!("{}", grid.spacing)),
            (
                "field_shape".into(),
                format!("{}x{}x{}", grid.shape[0], grid.shape[1], grid.shape[2]),
            ),
        ],
    };
    write_table(path, &table, &provenance, options)
}

// ---------------------------------------------------------------------------------------------
// Text values of cards
// ---------------------------------------------------------------------------------------------

fn axes_card(axes: FieldAxes) -> &'static str {
    match axes {
        FieldAxes::Supergalactic => "SUPERGALACTIC",
        FieldAxes::Galactic => "GALACTIC",
    }
}

fn parse_axes(text: &str) -> Option<FieldAxes> {
    match text.trim().to_ascii_uppercase().as_str() {
        "SUPERGALACTIC" => Some(FieldAxes::Supergalactic),
        "GALACTIC" => Some(FieldAxes::Galactic),
        _ => None,
    }
}

fn parse_length_unit(text: &str) -> Option<LengthUnit> {
    match super::units::parse_unit(text) {
        super::units::Unit::Mpc => Some(LengthUnit::Mpc),
        super::units::Unit::MpcOverH => Some(LengthUnit::MpcOverH),
        _ => None,
    }
}

fn is_km_s(text: &str) -> bool {
    super::units::parse_unit(text) == super::units::Unit::KmPerS
}

// ---------------------------------------------------------------------------------------------
// FITS image form
// ---------------------------------------------------------------------------------------------

/// Cards of one header that this format uses (each `None` when absent).
#[derive(Debug, Default, Clone)]
struct Cards {
    origin: [Option<f64>; 3],
    spacing: Option<f64>,
    axes: Option<String>,
    unit: Option<String>,
    bunit: Option<String>,
    version: Option<i64>,
}

impl Cards {
    fn read(file: &FitsHandle, hdu: &str) -> Result<Cards, String> {
        let mut c = Cards::default();
        for (a, key) in ORIGIN_KEYS.iter().enumerate() {
            c.origin[a] = file.key_f64(key).map_err(|m| format!("{hdu}: {m}"))?;
        }
        c.spacing = match file.key_f64("FS_CELL").map_err(|m| format!("{hdu}: {m}"))? {
            Some(v) => Some(v),
            // Files written before the card was renamed call it FS_SPACE.
            None => file
                .key_f64("FS_SPACE")
                .map_err(|m| format!("{hdu}: {m}"))?,
        };
        c.axes = file.key_str("FS_AXES").map_err(|m| format!("{hdu}: {m}"))?;
        c.unit = file
            .key_str("FS_LUNIT")
            .map_err(|m| format!("{hdu}: {m}"))?;
        c.bunit = file.key_str("BUNIT").map_err(|m| format!("{hdu}: {m}"))?;
        c.version = file.key_i64("FS_VERS").map_err(|m| format!("{hdu}: {m}"))?;
        Ok(c)
    }

    /// Own cards, the primary's where missing.
    fn or(self, primary: &Cards) -> Cards {
        Cards {
            origin: [
                self.origin[0].or(primary.origin[0]),
                self.origin[1].or(primary.origin[1]),
                self.origin[2].or(primary.origin[2]),
            ],
            spacing: self.spacing.or(primary.spacing),
            axes: self.axes.or_else(|| primary.axes.clone()),
            unit: self.unit.or_else(|| primary.unit.clone()),
            bunit: self.bunit.or_else(|| primary.bunit.clone()),
            version: self.version.or(primary.version),
        }
    }
}

const CARD_HELP: &str = "a flowsift field file needs FS_ORIG1..3, FS_CELL, FS_AXES, FS_LUNIT \
                         and BUNIT = 'km/s' on each image or on the primary header";

/// One image's geometry, resolved and checked.
#[derive(Debug, Clone, PartialEq)]
struct Geometry {
    origin: [f64; 3],
    spacing: f64,
    shape: [usize; 3],
    axes: FieldAxes,
    unit: LengthUnit,
}

/// What an image's pixels hold, for its `BUNIT`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Pixels {
    /// A velocity component: `BUNIT` km/s, required.
    Velocity,
    /// A density contrast: `BUNIT` absent or dimensionless.
    Contrast,
}

fn resolve_geometry(
    hdu: &str,
    cards: &Cards,
    shape: [usize; 3],
    axes_hint: Option<FieldAxes>,
    unit_hint: Option<LengthUnit>,
    pixels: Pixels,
) -> Result<Geometry, String> {
    let missing = |key: &str, what: &str| {
        format!("HDU {hdu}: no {key} card ({what}) in this HDU or the primary header; {CARD_HELP}")
    };
    if let Some(v) = cards.version {
        if v > FORMAT_VERSION {
            return Err(format!(
                "HDU {hdu}: FS_VERS = {v}, a newer field format than this flowsift reads \
                 (version {FORMAT_VERSION})"
            ));
        }
    }
    let mut origin = [0.0; 3];
    for a in 0..3 {
        let v = cards.origin[a]
            .ok_or_else(|| missing(ORIGIN_KEYS[a], "coordinate of the centre of the first cell"))?;
        if !v.is_finite() {
            return Err(format!(
                "HDU {hdu}: {} = {v} is not a finite number",
                ORIGIN_KEYS[a]
            ));
        }
        origin[a] = v;
    }
    let spacing = cards
        .spacing
        .ok_or_else(|| missing("FS_CELL", "cell size"))?;
    if !(spacing.is_finite() && spacing > 0.0) {
        return Err(format!(
            "HDU {hdu}: FS_CELL = {spacing}; the cell size must be positive and finite"
        ));
    }
    let axes = match (&cards.axes, axes_hint) {
        (Some(text), hint) => {
            let axes = parse_axes(text).ok_or_else(|| {
                format!("HDU {hdu}: FS_AXES = '{text}'; expected 'SUPERGALACTIC' or 'GALACTIC'")
            })?;
            if let Some(h) = hint.filter(|h| *h != axes) {
                return Err(format!(
                    "HDU {hdu}: FS_AXES = '{text}' but {} axes were asked for",
                    h.name()
                ));
            }
            axes
        }
        (None, Some(h)) => h,
        (None, None) => {
            return Err(missing(
                "FS_AXES",
                "'SUPERGALACTIC' or 'GALACTIC'; or give the axes explicitly",
            ))
        }
    };
    let unit = match (&cards.unit, unit_hint) {
        (Some(text), hint) => {
            let unit = parse_length_unit(text).ok_or_else(|| {
                format!("HDU {hdu}: FS_LUNIT = '{text}'; expected 'Mpc' or 'Mpc/h'")
            })?;
            if let Some(h) = hint.filter(|h| *h != unit) {
                return Err(format!(
                    "HDU {hdu}: FS_LUNIT = '{text}' but {} was asked for",
                    h.label()
                ));
            }
            unit
        }
        (None, Some(h)) => h,
        (None, None) => {
            return Err(missing(
                "FS_LUNIT",
                "'Mpc' or 'Mpc/h'; or give the unit explicitly",
            ))
        }
    };
    match (pixels, &cards.bunit) {
        (Pixels::Velocity, None) => return Err(missing("BUNIT", "'km/s'")),
        (Pixels::Velocity, Some(b)) if !is_km_s(b) => {
            return Err(format!(
                "HDU {hdu}: BUNIT = '{b}'; velocities must be in km/s"
            ))
        }
        (Pixels::Contrast, Some(b)) if !matches!(b.trim(), "" | "1") => {
            return Err(format!(
                "HDU {hdu}: BUNIT = '{b}'; a density contrast has no unit (leave BUNIT out, \
                 or write '' or '1')"
            ))
        }
        _ => {}
    }
    Ok(Geometry {
        origin,
        spacing,
        shape,
        axes,
        unit,
    })
}

/// The format's cards of the primary header (the fallback for every image's own).
fn primary_cards(file: &FitsHandle) -> Result<Cards, String> {
    file.move_to(0)
        .map_err(|s| format!("cannot read the primary header: {}", status_text(s)))?;
    Cards::read(file, "primary")
}

fn read_image_form(
    file: &FitsHandle,
    axes_hint: Option<FieldAxes>,
    unit_hint: Option<LengthUnit>,
) -> Result<VelocityGrid, String> {
    let primary = primary_cards(file)?;
    let mut geometry: Option<(Geometry, &str)> = None;
    let mut v: [Vec<f64>; 3] = [Vec::new(), Vec::new(), Vec::new()];
    for (c, &name) in EXTNAMES.iter().enumerate() {
        let hdu_type = file.find_hdu(name)?.ok_or_else(|| {
            format!(
                "has a {} image but no {name} HDU; a flowsift field file holds three images, \
                 EXTNAME VX, VY and VZ",
                EXTNAMES[0]
            )
        })?;
        let (g, values) = read_image_hdu(
            file,
            name,
            hdu_type,
            &primary,
            (axes_hint, unit_hint),
            Pixels::Velocity,
        )?;
        if let Some((first, first_name)) = &geometry {
            if *first != g {
                return Err(format!(
                    "HDU {name} does not match HDU {first_name}: {} vs {}",
                    describe(&g),
                    describe(first)
                ));
            }
        } else {
            geometry = Some((g, name));
        }
        v[c] = values;
    }
    let (g, _) = geometry.expect("three components read");
    VelocityGrid::new(g.origin, g.spacing, g.shape, g.axes, g.unit, v).map_err(|e| e.to_string())
}

fn read_density_image(
    file: &FitsHandle,
    axes_hint: Option<FieldAxes>,
    unit_hint: Option<LengthUnit>,
) -> Result<VelocityGrid, String> {
    let primary = primary_cards(file)?;
    let name = DENSITY_EXTNAME;
    let hdu_type = file
        .find_hdu(name)?
        .ok_or_else(|| format!("no {name} HDU"))?;
    let (g, values) = read_image_hdu(
        file,
        name,
        hdu_type,
        &primary,
        (axes_hint, unit_hint),
        Pixels::Contrast,
    )?;
    let n = values.len();
    VelocityGrid::new(
        g.origin,
        g.spacing,
        g.shape,
        g.axes,
        g.unit,
        [values, vec![0.0; n], vec![0.0; n]],
    )
    .map_err(|e| e.to_string())
}

/// One image HDU of a field or density file (the current HDU, of type `hdu_type`): its
/// geometry from its cards (the primary's where missing) and its pixels, each checked —
/// finite for a velocity, finite and above −1 for a density contrast.
fn read_image_hdu(
    file: &FitsHandle,
    name: &str,
    hdu_type: c_int,
    primary: &Cards,
    hints: (Option<FieldAxes>, Option<LengthUnit>),
    pixels: Pixels,
) -> Result<(Geometry, Vec<f64>), String> {
    if hdu_type != IMAGE_HDU {
        return Err(format!("HDU {name} is a table, not an image"));
    }
    let shape = file.image_shape().map_err(|m| format!("HDU {name}: {m}"))?;
    let cards = Cards::read(file, name)?.or(primary);
    let g = resolve_geometry(name, &cards, shape, hints.0, hints.1, pixels)?;
    let values = file
        .read_image(shape)
        .map_err(|m| format!("HDU {name}: {m}"))?;
    let (bad, rule) = match pixels {
        Pixels::Velocity => (
            values.iter().position(|x| !x.is_finite()),
            "field velocities must be finite",
        ),
        Pixels::Contrast => (
            values.iter().position(|d| !(d.is_finite() && *d > -1.0)),
            "a density contrast must be finite and above −1",
        ),
    };
    if let Some(idx) = bad {
        let (nx, ny) = (shape[0], shape[1]);
        return Err(format!(
            "HDU {name}: pixel [{}, {}, {}] is {}; {rule}",
            idx % nx + 1,
            (idx / nx) % ny + 1,
            idx / (nx * ny) + 1,
            values[idx]
        ));
    }
    Ok((g, values))
}

fn describe(g: &Geometry) -> String {
    format!(
        "shape {}×{}×{}, origin ({}, {}, {}), spacing {} {}, {} axes",
        g.shape[0],
        g.shape[1],
        g.shape[2],
        g.origin[0],
        g.origin[1],
        g.origin[2],
        g.spacing,
        g.unit.label(),
        g.axes.name()
    )
}

fn write_geometry_cards(file: &FitsHandle, grid: &VelocityGrid) -> Result<(), String> {
    let labels = ["x", "y", "z"];
    for a in 0..3 {
        file.write_f64(
            ORIGIN_KEYS[a],
            grid.origin[a],
            &format!("{} of the first cell centre", labels[a]),
        )?;
    }
    file.write_f64("FS_CELL", grid.spacing, "cell size (between cell centres)")?;
    file.write_str("FS_AXES", axes_card(grid.axes), "Cartesian axes of x, y, z")?;
    file.write_str(
        "FS_LUNIT",
        grid.length_unit.label(),
        "unit of FS_ORIGn and FS_CELL",
    )
}

fn write_image_form(file: &FitsHandle, grid: &VelocityGrid) -> Result<(), String> {
    let st = |what: &str| {
        let what = what.to_string();
        move |s: c_int| format!("cannot write {what}: {}", status_text(s))
    };
    file.create_image(BYTE_IMG, &[])
        .map_err(st("the primary header"))?;
    file.write_str("FS_FORM", FORMAT_NAME, "file format")?;
    file.write_key_i64("FS_VERS", FORMAT_VERSION, "file format version")
        .map_err(|s| format!("cannot write card FS_VERS: {}", status_text(s)))?;
    write_geometry_cards(file, grid)?;
    for text in [
        "Velocity field: images VX, VY, VZ (km/s), x fastest; cell (i,j,k)",
        "is centred at FS_ORIGn + (i,j,k)*FS_CELL, in FS_LUNIT.",
    ] {
        file.write_comment(text)
            .map_err(|s| format!("cannot write a comment: {}", status_text(s)))?;
    }

    let ctypes = match grid.axes {
        FieldAxes::Supergalactic => ["SGX", "SGY", "SGZ"],
        FieldAxes::Galactic => ["GX", "GY", "GZ"],
    };
    let axes_names = ["x", "y", "z"];
    for (c, &name) in EXTNAMES.iter().enumerate() {
        let shape: Vec<i64> = grid.shape.iter().map(|&n| n as i64).collect();
        file.create_image(DOUBLE_IMG, &shape)
            .map_err(st(&format!("image {name}")))?;
        file.write_str(
            "EXTNAME",
            name,
            &format!("velocity along {}", axes_names[c]),
        )?;
        file.write_str("BUNIT", "km/s", "unit of the pixel values")?;
        write_geometry_cards(file, grid)?;
        for (a, ctype) in ctypes.iter().enumerate() {
            let n = a + 1;
            file.write_str(&format!("CTYPE{n}"), ctype, "linear axis")?;
            file.write_f64(&format!("CRPIX{n}"), 1.0, "reference pixel")?;
            file.write_f64(&format!("CRVAL{n}"), grid.origin[a], "= FS_ORIG")?;
            file.write_f64(&format!("CDELT{n}"), grid.spacing, "= FS_CELL")?;
            if grid.length_unit == LengthUnit::Mpc {
                file.write_str(&format!("CUNIT{n}"), "Mpc", "")?;
            }
        }
        file.write_image(&grid.v[c])
            .map_err(st(&format!("the {name} pixels")))?;
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// Table form
// ---------------------------------------------------------------------------------------------

/// Values of a column as f64, erroring on a missing column or an empty / non-numeric entry.
fn table_column(table: &Table, wanted: &str) -> Result<(String, Vec<f64>), String> {
    let names: Vec<String> = table
        .frame
        .get_column_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let name = names
        .iter()
        .find(|n| n.eq_ignore_ascii_case(wanted))
        .cloned()
        .ok_or_else(|| {
            format!(
                "no column {wanted}; a field table needs columns x, y, z, vx, vy, vz \
                 (found: {})",
                names.join(", ")
            )
        })?;
    let column = table
        .frame
        .column(&name)
        .map_err(|e| format!("column {name}: {e}"))?;
    let cast = column
        .cast(&DataType::Float64)
        .map_err(|e| format!("column {name} is not numeric: {e}"))?;
    let ca = cast.f64().map_err(|e| format!("column {name}: {e}"))?;
    let mut out = Vec::with_capacity(ca.len());
    for (row, value) in ca.iter().enumerate() {
        match value {
            Some(v) if v.is_finite() => out.push(v),
            Some(v) => {
                return Err(format!(
                    "row {}: {name} = {v} is not a finite number",
                    row + 1
                ))
            }
            None => return Err(format!("row {}: {name} is empty or not a number", row + 1)),
        }
    }
    Ok((name, out))
}

fn column_unit<'a>(table: &'a Table, name: &str) -> Option<&'a str> {
    table
        .meta
        .get(name)
        .and_then(|m| m.unit.as_deref())
        .map(str::trim)
        .filter(|u| !u.is_empty())
}

/// The lattice the table's points lie on.
#[derive(Debug, Clone, Copy)]
struct Lattice {
    origin: [f64; 3],
    spacing: f64,
    shape: [usize; 3],
}

fn median(values: &mut [f64]) -> f64 {
    values.sort_by(|a, b| a.total_cmp(b));
    let n = values.len();
    if n % 2 == 1 {
        values[n / 2]
    } else {
        0.5 * (values[n / 2 - 1] + values[n / 2])
    }
}

/// Estimate origin, spacing and shape from the positions, robustly (medians), so that a few
/// stray points are reported as such instead of distorting the lattice.
fn infer_lattice(pos: &[Vec<f64>; 3]) -> Result<Lattice, String> {
    let scale = pos
        .iter()
        .flat_map(|c| c.iter())
        .fold(0.0f64, |m, x| m.max(x.abs()));
    let merge = 1e-6 * scale;
    // Gaps between consecutive distinct values, pooled over the axes.
    let mut gaps = Vec::new();
    for axis in pos {
        let mut sorted = axis.clone();
        sorted.sort_by(|a, b| a.total_cmp(b));
        let mut last = sorted[0];
        for &x in &sorted[1..] {
            if x - last > merge {
                gaps.push(x - last);
                last = x;
            }
        }
    }
    if gaps.is_empty() {
        return Err(
            "all points share one position, so the cell size cannot be inferred".to_string(),
        );
    }
    let h0 = median(&mut gaps);

    let mut origin = [0.0; 3];
    let mut shape = [1usize; 3];
    // Actual coordinates at the lowest and highest lattice index, per axis.
    let mut ends = [(0.0, 0.0); 3];
    for a in 0..3 {
        let xs = &pos[a];
        let xmin = xs.iter().copied().fold(f64::INFINITY, f64::min);
        let mut phases: Vec<f64> = xs
            .iter()
            .map(|&x| {
                let t = (x - xmin) / h0;
                t - t.round()
            })
            .collect();
        // The lattice through the median phase, or through the lowest value if that holds
        // more of the points (e.g. when the phases split evenly).
        let on_lattice = |xref: f64| {
            xs.iter()
                .filter(|&&x| {
                    let t = (x - xref) / h0;
                    (t - t.round()).abs() <= LATTICE_TOLERANCE_CELLS
                })
                .count()
        };
        let by_median = xmin + median(&mut phases) * h0;
        let xref = if on_lattice(xmin) > on_lattice(by_median) {
            xmin
        } else {
            by_median
        };
        let mut lo: Option<(i64, f64)> = None;
        let mut hi: Option<(i64, f64)> = None;
        for &x in xs {
            let t = (x - xref) / h0;
            let i = t.round();
            if (t - i).abs() > LATTICE_TOLERANCE_CELLS {
                continue;
            }
            let i = i as i64;
            if lo.is_none_or(|(l, _)| i < l) {
                lo = Some((i, x));
            }
            if hi.is_none_or(|(h, _)| i > h) {
                hi = Some((i, x));
            }
        }
        let (Some((ilo, xlo)), Some((ihi, xhi))) = (lo, hi) else {
            return Err("the positions do not lie on any regular grid".to_string());
        };
        origin[a] = xlo;
        shape[a] =
            usize::try_from(ihi - ilo + 1).map_err(|_| "the grid is too large".to_string())?;
        ends[a] = (xlo, xhi);
    }
    // Refine the spacing on the longest axis: its end points give the most digits.
    let a = (0..3).max_by_key(|&a| shape[a]).expect("three axes");
    let spacing = if shape[a] > 1 {
        (ends[a].1 - ends[a].0) / (shape[a] - 1) as f64
    } else {
        h0
    };
    Ok(Lattice {
        origin,
        spacing,
        shape,
    })
}

fn grid_from_table(
    table: &Table,
    axes_hint: Option<FieldAxes>,
    unit_hint: Option<LengthUnit>,
) -> Result<VelocityGrid, String> {
    let mut names = Vec::with_capacity(6);
    let mut values = Vec::with_capacity(6);
    for wanted in TABLE_COLUMNS {
        let (name, v) = table_column(table, wanted)?;
        names.push(name);
        values.push(v);
    }
    let rows = values[0].len();
    if rows == 0 {
        return Err("the table has no rows".to_string());
    }

    // Units from the table's metadata, where present.
    let mut unit = unit_hint;
    for name in &names[..3] {
        if let Some(text) = column_unit(table, name) {
            let u = parse_length_unit(text).ok_or_else(|| {
                format!("column {name} has unit '{text}'; positions must be in Mpc or Mpc/h")
            })?;
            match unit {
                Some(h) if h != u => {
                    return Err(format!(
                        "column {name} is in {} but {} was asked for (or set by another column)",
                        u.label(),
                        h.label()
                    ))
                }
                _ => unit = Some(u),
            }
        }
    }
    for name in &names[3..] {
        if let Some(text) = column_unit(table, name) {
            if !is_km_s(text) {
                return Err(format!(
                    "column {name} has unit '{text}'; velocities must be in km/s"
                ));
            }
        }
    }
    let unit = unit.unwrap_or_default();
    let axes = axes_hint.unwrap_or_default();

    let pos = [values[0].clone(), values[1].clone(), values[2].clone()];
    let lattice = infer_lattice(&pos)?;
    let Lattice {
        origin,
        spacing,
        shape,
    } = lattice;
    let n = shape
        .iter()
        .try_fold(1usize, |acc, &s| acc.checked_mul(s))
        .filter(|&n| n <= 1 << 34)
        .ok_or_else(|| {
            format!(
                "the points span a {}×{}×{} grid, too large to hold",
                shape[0], shape[1], shape[2]
            )
        })?;
    let unit_label = unit.label();
    let where_grid = || {
        format!(
            "spacing {spacing} {unit_label}, first cell at ({}, {}, {})",
            origin[0], origin[1], origin[2]
        )
    };

    // Row that filled each cell (1-based), 0 = empty.
    let mut filled = vec![0usize; n];
    let mut v: [Vec<f64>; 3] = [vec![0.0; n], vec![0.0; n], vec![0.0; n]];
    let axis_names = ["x", "y", "z"];
    for row in 0..rows {
        let p = [pos[0][row], pos[1][row], pos[2][row]];
        let mut cell = [0usize; 3];
        for a in 0..3 {
            let t = (p[a] - origin[a]) / spacing;
            let i = t.round();
            let off = (t - i).abs();
            let problem = if off > LATTICE_TOLERANCE_CELLS {
                format!(
                    "it lies {off:.3} cells off the lattice along {}",
                    axis_names[a]
                )
            } else if i < 0.0 || i >= shape[a] as f64 {
                format!("it lies outside the grid along {}", axis_names[a])
            } else {
                cell[a] = i as usize;
                continue;
            };
            return Err(format!(
                "row {} (x = {}, y = {}, z = {}) is not on the regular grid of the other \
                 points ({}): {problem}; a field table must list every point of a regular \
                 grid with one spacing on all three axes",
                row + 1,
                p[0],
                p[1],
                p[2],
                where_grid(),
            ));
        }
        let idx = cell[0] + shape[0] * (cell[1] + shape[1] * cell[2]);
        if filled[idx] != 0 {
            return Err(format!(
                "row {} (x = {}, y = {}, z = {}) repeats the grid point of row {}",
                row + 1,
                p[0],
                p[1],
                p[2],
                filled[idx]
            ));
        }
        filled[idx] = row + 1;
        for c in 0..3 {
            v[c][idx] = values[3 + c][row];
        }
    }
    if let Some(idx) = filled.iter().position(|&r| r == 0) {
        let [nx, ny, _] = shape;
        let cell = [idx % nx, (idx / nx) % ny, idx / (nx * ny)];
        let q: Vec<f64> = (0..3)
            .map(|a| origin[a] + spacing * cell[a] as f64)
            .collect();
        return Err(format!(
            "the points do not fill a complete grid: {rows} rows, but they span a {}×{}×{} grid \
             of {n} points ({}); the first missing point is (x = {}, y = {}, z = {})",
            shape[0],
            shape[1],
            shape[2],
            where_grid(),
            q[0],
            q[1],
            q[2]
        ));
    }
    VelocityGrid::new(origin, spacing, shape, axes, unit, v).map_err(|e| e.to_string())
}

// ---------------------------------------------------------------------------------------------
// Image and header-card calls on the shared cfitsio handle
// ---------------------------------------------------------------------------------------------

fn c_string(text: &str) -> Result<CString, String> {
    CString::new(text).map_err(|_| format!("'{text}' contains a NUL byte"))
}

impl FitsHandle {
    /// Move to the first HDU named `name` (EXTNAME or HDUNAME, any case); its type, or
    /// `None` (position unchanged) if there is none.
    fn find_hdu(&self, name: &str) -> Result<Option<c_int>, String> {
        let mut c_name = c_string(name)?.into_bytes_with_nul();
        let mut status = 0;
        // SAFETY: open handle; cfitsio only reads the NUL-terminated name.
        unsafe {
            sys::ffmnhd(
                self.raw(),
                ANY_HDU,
                c_name.as_mut_ptr() as *mut c_char,
                0,
                &mut status,
            )
        };
        match status {
            0 => {}
            BAD_HDU_NUM => return Ok(None),
            s => return Err(format!("cannot look for HDU {name}: {}", status_text(s))),
        }
        let mut hdu_type = 0;
        // SAFETY: open handle, valid out-pointer.
        unsafe { sys::ffghdt(self.raw(), &mut hdu_type, &mut status) };
        ok(status).map_err(|s| format!("cannot read HDU {name}: {}", status_text(s)))?;
        Ok(Some(hdu_type))
    }

    /// A real-valued card, `None` if absent.
    fn key_f64(&self, key: &str) -> Result<Option<f64>, String> {
        let c_key = c_string(key)?;
        let mut value = 0.0;
        let mut status = 0;
        // SAFETY: open handle, valid C string; a NULL comment pointer is allowed.
        unsafe {
            sys::ffgkyd(
                self.raw(),
                c_key.as_ptr(),
                &mut value,
                ptr::null_mut(),
                &mut status,
            )
        };
        match status {
            0 => Ok(Some(value)),
            KEY_NO_EXIST => Ok(None),
            s => Err(format!(
                "card {key} cannot be read as a number: {}",
                status_text(s)
            )),
        }
    }

    /// An integer card, `None` if absent.
    fn key_i64(&self, key: &str) -> Result<Option<i64>, String> {
        let c_key = c_string(key)?;
        let mut value: sys::LONGLONG = 0;
        let mut status = 0;
        // SAFETY: open handle, valid C string; a NULL comment pointer is allowed.
        unsafe {
            sys::ffgkyjj(
                self.raw(),
                c_key.as_ptr(),
                &mut value,
                ptr::null_mut(),
                &mut status,
            )
        };
        match status {
            0 => Ok(Some(value)),
            KEY_NO_EXIST => Ok(None),
            s => Err(format!(
                "card {key} cannot be read as an integer: {}",
                status_text(s)
            )),
        }
    }

    /// A string card (trailing blanks removed), `None` if absent.
    fn key_str(&self, key: &str) -> Result<Option<String>, String> {
        let c_key = c_string(key)?;
        let mut buf = [0 as c_char; FLEN_VALUE];
        let mut status = 0;
        // SAFETY: open handle; the buffer holds FLEN_VALUE characters, the most ffgkys
        // writes; a NULL comment pointer is allowed.
        unsafe {
            sys::ffgkys(
                self.raw(),
                c_key.as_ptr(),
                buf.as_mut_ptr(),
                ptr::null_mut(),
                &mut status,
            )
        };
        match status {
            0 => {
                // SAFETY: cfitsio NUL-terminates the value.
                let text = unsafe { CStr::from_ptr(buf.as_ptr()) }.to_string_lossy();
                Ok(Some(text.trim_end().to_string()))
            }
            KEY_NO_EXIST => Ok(None),
            s => Err(format!(
                "card {key} cannot be read as text: {}",
                status_text(s)
            )),
        }
    }

    fn write_f64(&self, key: &str, value: f64, comment: &str) -> Result<(), String> {
        let (c_key, c_comment) = (c_string(key)?, c_string(comment)?);
        let mut status = 0;
        // SAFETY: open handle, valid C strings. decim = −17: %.17G, which round-trips.
        unsafe {
            sys::ffpkyd(
                self.raw(),
                c_key.as_ptr(),
                value,
                -17,
                c_comment.as_ptr(),
                &mut status,
            )
        };
        ok(status).map_err(|s| format!("cannot write card {key}: {}", status_text(s)))
    }

    fn write_str(&self, key: &str, value: &str, comment: &str) -> Result<(), String> {
        let (c_key, c_value, c_comment) = (c_string(key)?, c_string(value)?, c_string(comment)?);
        let mut status = 0;
        // SAFETY: open handle, valid C strings (printable ASCII written by this module).
        unsafe {
            sys::ffpkys(
                self.raw(),
                c_key.as_ptr(),
                c_value.as_ptr(),
                c_comment.as_ptr(),
                &mut status,
            )
        };
        ok(status).map_err(|s| format!("cannot write card {key}: {}", status_text(s)))
    }

    /// Append an image HDU (the primary array if the file is empty).
    fn create_image(&self, bitpix: c_int, shape: &[i64]) -> Result<(), c_int> {
        let mut naxes: Vec<sys::LONGLONG> = shape.to_vec();
        naxes.push(0); // never a null pointer, even for NAXIS = 0
        let mut status = 0;
        // SAFETY: open handle; naxes holds at least `shape.len()` values.
        unsafe {
            sys::ffcrimll(
                self.raw(),
                bitpix,
                shape.len() as c_int,
                naxes.as_mut_ptr(),
                &mut status,
            )
        };
        ok(status)
    }

    /// Write all pixels of the current image, in blocks.
    fn write_image(&self, values: &[f64]) -> Result<(), c_int> {
        let mut block = Vec::with_capacity(WRITE_CHUNK.min(values.len()));
        for (b, chunk) in values.chunks(WRITE_CHUNK).enumerate() {
            block.clear();
            block.extend_from_slice(chunk);
            let mut status = 0;
            // SAFETY: open handle positioned on an image with at least as many pixels; the
            // buffer holds `chunk.len()` doubles (cfitsio may byte-swap it in place, hence
            // the copy).
            unsafe {
                sys::ffppr(
                    self.raw(),
                    TDOUBLE,
                    (b * WRITE_CHUNK + 1) as sys::LONGLONG,
                    chunk.len() as sys::LONGLONG,
                    block.as_mut_ptr() as *mut c_void,
                    &mut status,
                )
            };
            ok(status)?;
        }
        Ok(())
    }

    /// Shape of the current image, which must be 3-D and non-empty.
    fn image_shape(&self) -> Result<[usize; 3], String> {
        let mut naxis = 0;
        let mut status = 0;
        // SAFETY: open handle, valid out-pointer.
        unsafe { sys::ffgidm(self.raw(), &mut naxis, &mut status) };
        ok(status).map_err(|s| format!("cannot read the image size: {}", status_text(s)))?;
        if naxis != 3 {
            return Err(format!(
                "the image has NAXIS = {naxis}; a velocity component must be a 3-D image"
            ));
        }
        let mut naxes: [sys::LONGLONG; 3] = [0; 3];
        // SAFETY: naxes holds 3 values, as asked for.
        unsafe { sys::ffgiszll(self.raw(), 3, naxes.as_mut_ptr(), &mut status) };
        ok(status).map_err(|s| format!("cannot read the image size: {}", status_text(s)))?;
        let mut shape = [0usize; 3];
        for a in 0..3 {
            if naxes[a] < 1 {
                return Err(format!("NAXIS{} = {}; the image is empty", a + 1, naxes[a]));
            }
            shape[a] = naxes[a] as usize;
        }
        Ok(shape)
    }

    /// All pixels of the current image as f64.
    fn read_image(&self, shape: [usize; 3]) -> Result<Vec<f64>, String> {
        let n = shape
            .iter()
            .try_fold(1usize, |acc, &s| acc.checked_mul(s))
            .filter(|&n| n <= 1 << 34)
            .ok_or_else(|| format!("the image ({shape:?}) is too large"))?;
        let mut values = vec![0.0f64; n];
        let mut anynul = 0;
        let mut status = 0;
        // SAFETY: open handle on an image of n pixels; `values` holds n doubles; a NULL
        // null-value pointer means "no null checking".
        unsafe {
            sys::ffgpv(
                self.raw(),
                TDOUBLE,
                1,
                n as sys::LONGLONG,
                ptr::null_mut(),
                values.as_mut_ptr() as *mut c_void,
                &mut anynul,
                &mut status,
            )
        };
        ok(status).map_err(|s| format!("cannot read the pixels: {}", status_text(s)))?;
        Ok(values)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn field_unit_spellings() {
        assert_eq!(parse_length_unit(" Mpc "), Some(LengthUnit::Mpc));
        assert_eq!(parse_length_unit("Mpc/h"), Some(LengthUnit::MpcOverH));
        assert_eq!(parse_length_unit("h-1  Mpc"), Some(LengthUnit::MpcOverH));
        assert_eq!(parse_length_unit("kpc"), None);
        assert!(is_km_s("km/s") && is_km_s("km s-1") && !is_km_s("m/s"));
        assert_eq!(parse_axes("supergalactic"), Some(FieldAxes::Supergalactic));
        assert_eq!(
            parse_axes(axes_card(FieldAxes::Galactic)),
            Some(FieldAxes::Galactic)
        );
    }

    #[test]
    fn field_lattice_survives_a_stray_lowest_point() {
        // 4×3×2 lattice of spacing 3 from (1, 2, 3), the first point pushed 0.4 cells low.
        let mut pos = [Vec::new(), Vec::new(), Vec::new()];
        for k in 0..2 {
            for j in 0..3 {
                for i in 0..4 {
                    pos[0].push(1.0 + 3.0 * i as f64);
                    pos[1].push(2.0 + 3.0 * j as f64);
                    pos[2].push(3.0 + 3.0 * k as f64);
                }
            }
        }
        pos[0][0] -= 1.2;
        let l = infer_lattice(&pos).unwrap();
        assert_eq!(l.origin, [1.0, 2.0, 3.0]);
        assert_eq!(l.spacing, 3.0);
        assert_eq!(l.shape, [4, 3, 2]);
    }
}
