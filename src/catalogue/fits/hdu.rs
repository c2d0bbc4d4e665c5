//! HDU access: the listing of a file's HDUs, the choice of the binary-table HDU to read,
//! and the table's shape and block size.

use std::os::raw::{c_int, c_long};

use fitsio::sys;

use super::{ASCII_TBL, BINARY_TBL, IMAGE_HDU};
use crate::catalogue::cfitsio::{ok, status_text, FitsHandle};

/// Rows per block when cfitsio cannot suggest a number.
const FALLBACK_BLOCK_ROWS: usize = 10_000;

impl FitsHandle {
    /// Rows per block that cfitsio's buffers hold for the current table.
    pub(super) fn block_rows(&self) -> usize {
        let mut rows: c_long = 0;
        let mut status = 0;
        // SAFETY: open handle positioned on a table.
        unsafe { sys::ffgrsz(self.raw(), &mut rows, &mut status) };
        if status == 0 && rows > 0 {
            rows as usize
        } else {
            FALLBACK_BLOCK_ROWS
        }
    }
}

// ---------------------------------------------------------------------------------------------
// HDUs
// ---------------------------------------------------------------------------------------------

/// What the HDU listing in error messages shows about one HDU.
pub(super) struct HduSummary {
    pub(super) index: usize,
    pub(super) hdu_type: c_int,
    pub(super) extname: Option<String>,
    pub(super) what: String,
}

impl HduSummary {
    /// "HDU 2 (EXTNAME 'GALAXIES')", for messages about this HDU.
    pub(super) fn label(&self) -> String {
        match (&self.extname, self.index) {
            (None, 0) => "HDU 0 (primary)".to_string(),
            (Some(name), 0) => format!("HDU 0 (primary, EXTNAME '{name}')"),
            (Some(name), i) => format!("HDU {i} (EXTNAME '{name}')"),
            (None, i) => format!("HDU {i}"),
        }
    }

    fn line(&self) -> String {
        let name = match &self.extname {
            Some(name) => format!("EXTNAME '{name}'"),
            None => "no EXTNAME".to_string(),
        };
        format!("{}: {}, {}", self.index, name, self.what)
    }
}

fn list_hdus(file: &FitsHandle) -> Result<Vec<HduSummary>, String> {
    let mut count: c_int = 0;
    let mut status = 0;
    // SAFETY: open handle.
    unsafe { sys::ffthdu(file.raw(), &mut count, &mut status) };
    if status != 0 {
        return Err(format!("cannot count the HDUs: {}", status_text(status)));
    }
    let mut out = Vec::with_capacity(count.max(0) as usize);
    for index in 0..count.max(0) as usize {
        let hdu_type = file
            .move_to(index)
            .map_err(|s| format!("cannot read HDU {index}: {}", status_text(s)))?;
        let extname = file
            .key_text("EXTNAME")
            .map_err(|s| format!("cannot read HDU {index}: {}", status_text(s)))?
            .map(|n| n.trim().to_string())
            .filter(|n| !n.is_empty());
        let what = match hdu_type {
            IMAGE_HDU => describe_image(file),
            ASCII_TBL => format!("ASCII table ({})", describe_table(file)),
            BINARY_TBL => format!("binary table ({})", describe_table(file)),
            other => format!("HDU of unknown type {other}"),
        };
        out.push(HduSummary {
            index,
            hdu_type,
            extname,
            what,
        });
    }
    Ok(out)
}

fn describe_image(file: &FitsHandle) -> String {
    let mut naxis: c_int = 0;
    let mut status = 0;
    // SAFETY: open handle on an image HDU.
    unsafe { sys::ffgidm(file.raw(), &mut naxis, &mut status) };
    if status != 0 || naxis <= 0 {
        return "empty image".to_string();
    }
    let mut sizes = vec![0i64; naxis as usize];
    // SAFETY: `sizes` holds `naxis` elements.
    unsafe { sys::ffgiszll(file.raw(), naxis, sizes.as_mut_ptr(), &mut status) };
    if status != 0 {
        return "image".to_string();
    }
    let dims: Vec<String> = sizes.iter().map(|s| s.to_string()).collect();
    format!("image {}", dims.join("×"))
}

fn describe_table(file: &FitsHandle) -> String {
    let (ncols, nrows) = table_shape(file).unwrap_or((0, 0));
    format!("{ncols} columns, {nrows} rows")
}

pub(super) fn table_shape(file: &FitsHandle) -> Result<(usize, usize), c_int> {
    let mut ncols: c_int = 0;
    let mut nrows: i64 = 0;
    let mut status = 0;
    // SAFETY: open handle on a table HDU.
    unsafe {
        sys::ffgncl(file.raw(), &mut ncols, &mut status);
        sys::ffgnrwll(file.raw(), &mut nrows, &mut status);
    }
    ok(status).map(|()| (ncols.max(0) as usize, nrows.max(0) as usize))
}

/// cfitsio lists HDUs up to the first one whose header it cannot read: when bytes follow
/// the last HDU listed, the next one is damaged, and this says how.
fn damaged_after(file: &FitsHandle, hdus: &[HduSummary]) -> Option<String> {
    /// cfitsio's status for "tried to move past the end of the file".
    const END_OF_FILE: c_int = 107;
    let next = hdus.len();
    match file.move_to(next) {
        Err(status) if status != END_OF_FILE => Some(format!(
            "the header of HDU {next} is damaged ({}); {}",
            status_text(status),
            hdu_listing(hdus)
        )),
        _ => None,
    }
}

fn hdu_listing(hdus: &[HduSummary]) -> String {
    let lines: Vec<String> = hdus.iter().map(|h| format!("\n  {}", h.line())).collect();
    format!("HDUs in this file:{}", lines.concat())
}

/// Choose the HDU, leaving the handle positioned on it.
pub(super) fn select_hdu(file: &FitsHandle, hdu: Option<&str>) -> Result<HduSummary, String> {
    let hdus = list_hdus(file)?;
    let index = match hdu.map(str::trim) {
        None => match hdus.iter().find(|h| h.hdu_type == BINARY_TBL) {
            Some(h) => h.index,
            None => {
                return Err(match damaged_after(file, &hdus) {
                    Some(damage) => damage,
                    None => format!("no binary-table HDU; {}", hdu_listing(&hdus)),
                })
            }
        },
        Some(spec) if !spec.is_empty() && spec.bytes().all(|b| b.is_ascii_digit()) => {
            match spec.parse::<usize>().ok().filter(|&i| i < hdus.len()) {
                Some(i) => i,
                None => {
                    return Err(format!(
                        "no HDU number {spec} (HDUs are numbered from 0, the primary); {}",
                        hdu_listing(&hdus)
                    ))
                }
            }
        }
        Some(spec) => match hdus.iter().find(|h| {
            h.extname
                .as_deref()
                .is_some_and(|n| n.eq_ignore_ascii_case(spec))
        }) {
            Some(h) => h.index,
            None => {
                return Err(format!(
                    "no HDU with EXTNAME '{spec}' (give an EXTNAME or an HDU number); {}",
                    hdu_listing(&hdus)
                ))
            }
        },
    };
    let chosen = &hdus[index];
    if chosen.hdu_type != BINARY_TBL {
        return Err(format!(
            "{} is an {}, not a binary table; {}",
            chosen.label(),
            chosen.what,
            hdu_listing(&hdus)
        ));
    }
    file.move_to(index)
        .map_err(|s| format!("cannot read {}: {}", chosen.label(), status_text(s)))?;
    let mut hdus = hdus;
    Ok(hdus.swap_remove(index))
}
