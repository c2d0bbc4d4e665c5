//! What each output format can hold, and what becomes of the other columns.
//!
//! A column flowsift does not use passes through to the output as it was read. Parquet
//! holds every type polars reads. A FITS binary table holds numbers, booleans and text, so
//! dates, times, durations and decimals are written there as their ISO 8601 / decimal text;
//! CSV and TSV write dates and decimals as text themselves and durations as text here;
//! VOTable and ECSV outputs take what FITS takes. A
//! nested column (struct, list, array) or binary data has no place in FITS, CSV or TSV: it
//! is left out of such an output, and the run's summary names it.

use polars::prelude::*;

use super::{Format, Table};

/// What becomes of one column in an output format.
#[derive(Debug, Clone, PartialEq, Eq)]
enum Fate {
    Kept,
    AsText,
    LeftOut,
}

fn fate(format: Format, dtype: &DataType) -> Fate {
    let nested = matches!(
        dtype,
        DataType::Struct(_) | DataType::List(_) | DataType::Array(..) | DataType::Binary
    ) || matches!(dtype, DataType::BinaryOffset);
    match format {
        Format::Parquet => Fate::Kept,
        _ if nested => Fate::LeftOut,
        Format::Fits | Format::VoTable | Format::Ecsv => match dtype {
            DataType::Date
            | DataType::Datetime(..)
            | DataType::Time
            | DataType::Duration(_)
            | DataType::Decimal(..)
            | DataType::Categorical(..)
            | DataType::Enum(..) => Fate::AsText,
            _ => Fate::Kept,
        },
        Format::Csv | Format::Tsv => match dtype {
            DataType::Duration(_) => Fate::AsText,
            _ => Fate::Kept,
        },
    }
}

/// The columns of `table` an output in `format` cannot hold, each with its type: they are
/// left out of it (for the run's summary).
pub fn left_out(format: Format, table: &Table) -> Vec<String> {
    table
        .frame
        .columns()
        .iter()
        .filter(|c| fate(format, c.dtype()) == Fate::LeftOut)
        .map(|c| format!("'{}' ({})", c.name(), c.dtype()))
        .collect()
}

/// `table` as an output in `format` stores it: columns written as text converted, columns
/// it cannot hold removed (see [`left_out`]). `None` when nothing changes.
pub fn prepare(format: Format, table: &Table) -> Result<Option<Table>, String> {
    let fates: Vec<Fate> = table
        .frame
        .columns()
        .iter()
        .map(|c| fate(format, c.dtype()))
        .collect();
    if fates.iter().all(|f| *f == Fate::Kept) {
        return Ok(None);
    }
    let mut columns = Vec::with_capacity(fates.len());
    for (column, f) in table.frame.columns().iter().zip(&fates) {
        match f {
            Fate::Kept => columns.push(column.clone()),
            Fate::AsText => columns.push(
                column
                    .cast(&DataType::String)
                    .map_err(|e| format!("column '{}' as text: {e}", column.name()))?,
            ),
            Fate::LeftOut => {}
        }
    }
    let frame = DataFrame::new(table.frame.height(), columns).map_err(|e| e.to_string())?;
    let mut meta = table.meta.clone();
    meta.retain(|name, _| frame.column(name).is_ok());
    Ok(Some(Table::new(frame, meta)))
}
