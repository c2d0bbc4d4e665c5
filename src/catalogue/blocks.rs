//! Catalogues read and written a block of rows at a time, for the formats that allow it
//! without holding the file: Parquet (row groups, [`parquet::ParquetBlocks`]) and FITS
//! binary tables (row ranges, [`fits::FitsBlocks`]) in, Parquet out
//! ([`parquet::ParquetBlockWriter`]). Other formats are read whole.

use std::path::Path;

use super::{fits, parquet, CatalogueError, Format, ReadOptions, Table};

/// A catalogue opened for reading in blocks.
pub enum BlockSource {
    Parquet(parquet::ParquetBlocks),
    Fits(fits::FitsBlocks),
}

impl BlockSource {
    /// The catalogue at `path` opened for reading in blocks; `None` for a format read whole
    /// (CSV/TSV, VOTable, ECSV, gzip-compressed FITS).
    pub fn open(path: &Path, options: &ReadOptions) -> Result<Option<BlockSource>, CatalogueError> {
        match Format::from_path(path)? {
            Format::Parquet => Ok(Some(BlockSource::Parquet(parquet::ParquetBlocks::open(
                path,
            )?))),
            Format::Fits if !is_compressed(path) => Ok(Some(BlockSource::Fits(
                fits::FitsBlocks::open(path, options.hdu.as_deref())?,
            ))),
            _ => Ok(None),
        }
    }

    pub fn rows(&self) -> usize {
        match self {
            BlockSource::Parquet(p) => p.rows(),
            BlockSource::Fits(f) => f.rows(),
        }
    }

    /// The number of columns (for the memory a block takes).
    pub fn columns(&self) -> usize {
        match self {
            BlockSource::Parquet(p) => p.columns(),
            BlockSource::Fits(f) => f.columns(),
        }
    }

    /// Rows `start .. start + len`, every column or only those named.
    pub fn read(
        &self,
        start: usize,
        len: usize,
        columns: Option<&[String]>,
    ) -> Result<Table, CatalogueError> {
        match self {
            BlockSource::Parquet(p) => p.read(start, len, columns),
            BlockSource::Fits(f) => f.read(start, len, columns),
        }
    }
}

/// Whether outputs of this format can be written in blocks.
pub fn writes_in_blocks(format: Format) -> bool {
    format == Format::Parquet
}

fn is_compressed(path: &Path) -> bool {
    let name = path.to_string_lossy().to_ascii_lowercase();
    name.ends_with(".gz")
}
