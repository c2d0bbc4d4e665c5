//! Covariance-matrix files written by `flowsift covariance`, atomically:
//! - FITS: an empty primary HDU, an image HDU `COVARIANCE` (N × N, BITPIX = −64, `BUNIT`,
//!   the settings as header cards, the run's record as the long-string card `RECORD` with
//!   the FITS long-string convention), and a binary table HDU `ROWS` with the 0-based input
//!   row of each matrix row (column `row`, 64-bit integers);
//! - NumPy: the `.npy` format, version 1.0, of the NumPy project (NEP 1, "A simple file
//!   format for NumPy arrays"): the magic string `\x93NUMPY`, version bytes 1 0, a
//!   little-endian u16 header length, an ASCII Python-literal header
//!   `{'descr': '<f8', 'fortran_order': False, 'shape': (N, N), }` padded with spaces and a
//!   newline so that the data start at a multiple of 64 bytes, then the values in C order.
//!   The rest (rows, settings, record) goes to a sidecar JSON file.

use std::ffi::CString;
use std::os::raw::{c_char, c_int, c_void};
use std::path::Path;
use std::ptr;

use fitsio::sys;

use super::cfitsio::{ok, status_text, FitsHandle};
use super::CatalogueError;

const TDOUBLE: c_int = 82;
const TLONGLONG: c_int = 81;
const BINARY_TBL: c_int = 2;
/// Pixels per call when writing the image.
const CHUNK: usize = 1 << 16;

/// The value of a header card.
#[derive(Debug, Clone, PartialEq)]
pub enum CardValue {
    Number(f64),
    Integer(i64),
    Text(String),
}

/// A header card: keyword (≤ 8 characters, upper case), value, comment.
#[derive(Debug, Clone, PartialEq)]
pub struct Card {
    pub key: String,
    pub value: CardValue,
    pub comment: String,
}

fn c_text(text: &str) -> Result<CString, String> {
    // FITS headers hold printable ASCII; anything else is replaced.
    let clean: String = text
        .chars()
        .map(|c| {
            if c.is_ascii() && !c.is_ascii_control() {
                c
            } else {
                '?'
            }
        })
        .collect();
    CString::new(clean).map_err(|e| e.to_string())
}

fn card(file: &FitsHandle, c: &Card) -> Result<(), String> {
    let key = c_text(&c.key)?;
    let comment = c_text(&c.comment)?;
    let mut status = 0;
    // SAFETY: open handle, valid C strings.
    unsafe {
        match &c.value {
            CardValue::Number(v) => sys::ffpkyd(
                file.raw(),
                key.as_ptr(),
                *v,
                -17,
                comment.as_ptr(),
                &mut status,
            ),
            CardValue::Integer(v) => {
                sys::ffpkyj(file.raw(), key.as_ptr(), *v, comment.as_ptr(), &mut status)
            }
            CardValue::Text(t) => {
                let value = c_text(t)?;
                sys::ffpkls(
                    file.raw(),
                    key.as_ptr(),
                    value.as_ptr(),
                    comment.as_ptr(),
                    &mut status,
                )
            }
        }
    };
    ok(status).map_err(|s| format!("cannot write card {}: {}", c.key, status_text(s)))
}

fn comment(file: &FitsHandle, text: &str) -> Result<(), String> {
    for chunk in text.as_bytes().chunks(70) {
        let t = c_text(&String::from_utf8_lossy(chunk))?;
        let mut status = 0;
        // SAFETY: open handle, valid C string.
        unsafe { sys::ffpcom(file.raw(), t.as_ptr(), &mut status) };
        ok(status).map_err(|s| format!("cannot write a COMMENT card: {}", status_text(s)))?;
    }
    Ok(())
}

fn create_image(file: &FitsHandle, shape: &[i64]) -> Result<(), String> {
    let mut naxes: Vec<sys::LONGLONG> = shape.to_vec();
    naxes.push(0);
    let mut status = 0;
    // SAFETY: open handle; naxes holds at least shape.len() values.
    unsafe {
        sys::ffcrimll(
            file.raw(),
            -64,
            shape.len() as c_int,
            naxes.as_mut_ptr(),
            &mut status,
        )
    };
    ok(status).map_err(|s| format!("cannot create an image HDU: {}", status_text(s)))
}

fn write_pixels(file: &FitsHandle, values: &[f64]) -> Result<(), String> {
    let mut block = Vec::with_capacity(CHUNK.min(values.len()));
    for (b, chunk) in values.chunks(CHUNK).enumerate() {
        block.clear();
        block.extend_from_slice(chunk);
        let mut status = 0;
        // SAFETY: open handle on an image with at least as many pixels; the buffer holds
        // chunk.len() doubles (cfitsio may byte-swap it in place, hence the copy).
        unsafe {
            sys::ffppr(
                file.raw(),
                TDOUBLE,
                (b * CHUNK + 1) as sys::LONGLONG,
                chunk.len() as sys::LONGLONG,
                block.as_mut_ptr() as *mut c_void,
                &mut status,
            )
        };
        ok(status).map_err(|s| format!("cannot write the matrix: {}", status_text(s)))?;
    }
    Ok(())
}

fn write_rows_table(file: &FitsHandle, rows: &[i64]) -> Result<(), String> {
    let name = c_text("row")?;
    let form = c_text("K")?;
    let extname = c_text("ROWS")?;
    let mut names = [name.as_ptr() as *mut c_char];
    let mut forms = [form.as_ptr() as *mut c_char];
    let mut status = 0;
    // SAFETY: arrays of one valid C string each, only read by cfitsio.
    unsafe {
        sys::ffcrtb(
            file.raw(),
            BINARY_TBL,
            0,
            1,
            names.as_mut_ptr(),
            forms.as_mut_ptr(),
            ptr::null_mut(),
            extname.as_ptr(),
            &mut status,
        )
    };
    ok(status).map_err(|s| format!("cannot create the ROWS table: {}", status_text(s)))?;
    if !rows.is_empty() {
        let mut data = rows.to_vec();
        // SAFETY: open handle on the new table; `data` holds rows.len() 64-bit integers.
        unsafe {
            sys::ffpcl(
                file.raw(),
                TLONGLONG,
                1,
                1,
                1,
                data.len() as sys::LONGLONG,
                data.as_mut_ptr() as *mut c_void,
                &mut status,
            )
        };
        ok(status).map_err(|s| format!("cannot write the ROWS table: {}", status_text(s)))?;
    }
    card(
        file,
        &Card {
            key: "TUCD1".into(),
            value: CardValue::Text("meta.id;meta.number".into()),
            comment: "0-based input row of each matrix row".into(),
        },
    )
}

/// Write the N × N matrix `matrix` (row-major; symmetric, so the FITS axis order does not
/// matter), the input row of each matrix row, `cards` and `comments` on the image HDU.
pub fn write_covariance_fits(
    path: &Path,
    matrix: &[f64],
    rows: &[i64],
    bunit: &str,
    cards: &[Card],
    comments: &[String],
) -> Result<(), CatalogueError> {
    let n = rows.len();
    if matrix.len() != n * n {
        return Err(CatalogueError::write(
            path,
            format!(
                "a {n} × {n} matrix needs {} values, got {}",
                n * n,
                matrix.len()
            ),
        ));
    }
    let compress = path
        .file_name()
        .map(|s| s.to_string_lossy().to_ascii_lowercase().ends_with(".gz"))
        .unwrap_or(false);
    super::atomic::write_via_path(path, |tmp| {
        let file = FitsHandle::create(tmp, compress)?;
        create_image(&file, &[])?;
        create_image(&file, &[n as i64, n as i64])?;
        card(
            &file,
            &Card {
                key: "EXTNAME".into(),
                value: CardValue::Text("COVARIANCE".into()),
                comment: "covariance of the radial peculiar velocities".into(),
            },
        )?;
        card(
            &file,
            &Card {
                key: "BUNIT".into(),
                value: CardValue::Text(bunit.into()),
                comment: "unit of the matrix elements".into(),
            },
        )?;
        for c in cards {
            card(&file, c)?;
        }
        for c in comments {
            comment(&file, c)?;
        }
        write_pixels(&file, matrix)?;
        write_rows_table(&file, rows)?;
        file.close()
            .map_err(|s| format!("cannot finish writing the file: {}", status_text(s)))
    })
}

/// The header of a `.npy` file (version 1.0) for an `n_rows` × `n_cols` array of f64 in C
/// order: everything before the values.
pub fn npy_header(n_rows: usize, n_cols: usize) -> Vec<u8> {
    let mut header =
        format!("{{'descr': '<f8', 'fortran_order': False, 'shape': ({n_rows}, {n_cols}), }}");
    // magic (6) + version (2) + length (2) + header + '\n' ≡ 0 (mod 64).
    let unpadded = 10 + header.len() + 1;
    let pad = (64 - unpadded % 64) % 64;
    header.push_str(&" ".repeat(pad));
    header.push('\n');
    let mut out = Vec::with_capacity(10 + header.len());
    out.extend_from_slice(b"\x93NUMPY");
    out.extend_from_slice(&[1, 0]);
    out.extend_from_slice(&(header.len() as u16).to_le_bytes());
    out.extend_from_slice(header.as_bytes());
    out
}

/// Write an `n` × `n` matrix as `.npy`, atomically, streaming the values.
pub fn write_covariance_npy(path: &Path, matrix: &[f64], n: usize) -> Result<(), CatalogueError> {
    if matrix.len() != n * n {
        return Err(CatalogueError::write(
            path,
            format!(
                "a {n} × {n} matrix needs {} values, got {}",
                n * n,
                matrix.len()
            ),
        ));
    }
    super::atomic::write_via_file(path, |f| {
        use std::io::Write;
        let mut w = std::io::BufWriter::new(f);
        let mut write = || -> std::io::Result<()> {
            w.write_all(&npy_header(n, n))?;
            for v in matrix {
                w.write_all(&v.to_le_bytes())?;
            }
            w.flush()
        };
        write().map_err(|e| format!("cannot write: {e}"))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The header follows NEP 1 (version 1.0): magic, version, length, 64-byte alignment,
    /// newline at the end.
    #[test]
    fn npy_header_is_aligned() {
        let mut b = npy_header(2, 2);
        for v in [1.0f64, 2.0, 3.0, 4.0] {
            b.extend_from_slice(&v.to_le_bytes());
        }
        assert_eq!(&b[..6], b"\x93NUMPY");
        assert_eq!(&b[6..8], &[1, 0]);
        let hlen = u16::from_le_bytes([b[8], b[9]]) as usize;
        assert_eq!((10 + hlen) % 64, 0);
        assert_eq!(b[10 + hlen - 1], b'\n');
        let text = std::str::from_utf8(&b[10..10 + hlen]).unwrap();
        assert!(text.starts_with("{'descr': '<f8', 'fortran_order': False, 'shape': (2, 2), }"));
        assert_eq!(b.len(), 10 + hlen + 32);
        assert_eq!(
            f64::from_le_bytes(b[10 + hlen + 8..10 + hlen + 16].try_into().unwrap()),
            2.0
        );
    }
}
