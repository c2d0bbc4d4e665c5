//! The cfitsio file handle shared by the catalogue (`fits.rs`) and velocity-field
//! (`field_io.rs`) readers and writers: opening without cfitsio's extended file-name syntax,
//! creating (optionally gzip-compressed), closing with the status of the final flush, and
//! cfitsio's status texts. Each module adds the header and data calls it needs in its own
//! `impl FitsHandle` block.

use std::ffi::{CStr, CString};
use std::os::raw::{c_char, c_int};
use std::path::Path;
use std::ptr;

use fitsio::sys;

pub(super) const READONLY: c_int = 0;
/// cfitsio keeps file names in buffers of this size (FLEN_FILENAME), terminator included.
pub(super) const MAX_PATH_BYTES: usize = 1024;

/// An open cfitsio file; closed (ignoring errors) when dropped, or explicitly by
/// [`FitsHandle::close`] to learn whether the final flush (and compression) worked.
pub(super) struct FitsHandle {
    ptr: std::cell::Cell<*mut sys::fitsfile>,
}

impl FitsHandle {
    pub(super) fn open(path: &Path) -> Result<FitsHandle, String> {
        match std::fs::metadata(path) {
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                return Err("no such file".to_string())
            }
            Err(e) => return Err(format!("cannot read: {e}")),
            Ok(m) if m.is_dir() => return Err("is a folder, not a FITS file".to_string()),
            Ok(_) => {}
        }
        let c_path = c_path(path)?;
        let mut fptr: *mut sys::fitsfile = ptr::null_mut();
        let mut status = 0;
        // SAFETY: c_path is a valid NUL-terminated string; fptr receives the new handle.
        // ffdkopn takes the name literally (no extended filename syntax) but still
        // recognises and decompresses gzip files.
        unsafe { sys::ffdkopn(&mut fptr, c_path.as_ptr(), READONLY, &mut status) };
        let handle = FitsHandle {
            ptr: std::cell::Cell::new(fptr),
        };
        if status != 0 || fptr.is_null() {
            return Err(format!("cannot open as FITS: {}", status_text(status)));
        }
        Ok(handle)
    }

    pub(super) fn create(path: &Path, compress: bool) -> Result<FitsHandle, String> {
        let absolute =
            std::path::absolute(path).map_err(|e| format!("cannot resolve the path: {e}"))?;
        let name = if compress {
            let text = path_text(&absolute)?;
            if text.contains('(') || text.contains('[') {
                return Err(
                    "a compressed (.gz) FITS output path must not contain '(' or '['; \
                     choose another name or write an uncompressed .fits file"
                        .to_string(),
                );
            }
            // The explicit driver prefix makes cfitsio compress whatever the suffix's case.
            format!("compressoutfile://{text}")
        } else {
            path_text(&absolute)?.to_string()
        };
        if name.len() >= MAX_PATH_BYTES {
            return Err(format!(
                "the path is too long for cfitsio (at most {} bytes)",
                MAX_PATH_BYTES - 1
            ));
        }
        let c_name = CString::new(name).map_err(|_| "the path contains a NUL byte".to_string())?;
        let mut fptr: *mut sys::fitsfile = ptr::null_mut();
        let mut status = 0;
        // SAFETY: valid C string and out-pointer. ffdkinit takes the name literally; ffinit
        // parses it, which is what selects the compressing driver.
        unsafe {
            if compress {
                sys::ffinit(&mut fptr, c_name.as_ptr(), &mut status);
            } else {
                sys::ffdkinit(&mut fptr, c_name.as_ptr(), &mut status);
            }
        }
        let handle = FitsHandle {
            ptr: std::cell::Cell::new(fptr),
        };
        if status != 0 || fptr.is_null() {
            return Err(format!("cannot create the file: {}", status_text(status)));
        }
        Ok(handle)
    }

    pub(super) fn raw(&self) -> *mut sys::fitsfile {
        self.ptr.get()
    }

    pub(super) fn close(&self) -> Result<(), c_int> {
        let fptr = self.ptr.replace(ptr::null_mut());
        if fptr.is_null() {
            return Ok(());
        }
        let mut status = 0;
        // SAFETY: fptr came from ffdkopn/ffinit and is closed exactly once.
        unsafe { sys::ffclos(fptr, &mut status) };
        if status == 0 {
            Ok(())
        } else {
            Err(status)
        }
    }

    pub(super) fn move_to(&self, index: usize) -> Result<c_int, c_int> {
        let mut hdu_type = 0;
        let mut status = 0;
        // SAFETY: open handle; out-pointers are valid.
        unsafe { sys::ffmahd(self.raw(), (index + 1) as c_int, &mut hdu_type, &mut status) };
        ok(status).map(|()| hdu_type)
    }

    /// An integer card.
    pub(super) fn write_key_i64(&self, key: &str, value: i64, comment: &str) -> Result<(), c_int> {
        let c_key = CString::new(key).expect("keyword names have no NUL");
        let c_comment = CString::new(comment).expect("comments have no NUL");
        let mut status = 0;
        // SAFETY: open handle, valid C strings.
        unsafe {
            sys::ffpkyj(
                self.raw(),
                c_key.as_ptr(),
                value,
                c_comment.as_ptr(),
                &mut status,
            )
        };
        ok(status)
    }

    /// A COMMENT card.
    pub(super) fn write_comment(&self, text: &str) -> Result<(), c_int> {
        let c_text = CString::new(text).expect("comments have no NUL");
        let mut status = 0;
        // SAFETY: open handle, valid C string.
        unsafe { sys::ffpcom(self.raw(), c_text.as_ptr(), &mut status) };
        ok(status)
    }

    /// A HISTORY card (cfitsio continues text longer than one card on further ones).
    pub(super) fn write_history(&self, text: &str) -> Result<(), c_int> {
        let c_text = CString::new(text).expect("history text has no NUL");
        let mut status = 0;
        // SAFETY: open handle, valid C string.
        unsafe { sys::ffphis(self.raw(), c_text.as_ptr(), &mut status) };
        ok(status)
    }
}

impl Drop for FitsHandle {
    fn drop(&mut self) {
        let _ = self.close();
    }
}

pub(super) fn ok(status: c_int) -> Result<(), c_int> {
    if status == 0 {
        Ok(())
    } else {
        Err(status)
    }
}

/// cfitsio's short text for a status code, with the code.
pub(super) fn status_text(status: c_int) -> String {
    let mut buf = [0 as c_char; 32];
    // SAFETY: ffgerr writes at most 30 characters and a terminator (FLEN_STATUS = 31).
    unsafe { sys::ffgerr(status, buf.as_mut_ptr()) };
    let text = unsafe { CStr::from_ptr(buf.as_ptr()) }
        .to_string_lossy()
        .into_owned();
    if text.is_empty() {
        format!("cfitsio status {status}")
    } else {
        format!("{text} (cfitsio status {status})")
    }
}

fn path_text(path: &Path) -> Result<&str, String> {
    path.to_str()
        .ok_or_else(|| "the path is not valid UTF-8, which cfitsio needs".to_string())
}

fn c_path(path: &Path) -> Result<CString, String> {
    let text = path_text(path)?;
    if text.len() >= MAX_PATH_BYTES {
        return Err(format!(
            "the path is too long for cfitsio (at most {} bytes)",
            MAX_PATH_BYTES - 1
        ));
    }
    CString::new(text).map_err(|_| "the path contains a NUL byte".to_string())
}
