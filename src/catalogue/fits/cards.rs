//! Header cards: keyword values read and written as text (long-string convention), the
//! provenance cards (`PROVnnn`, and the earlier `PRVKnnn`/`PRVVnnn` with their `%XX`
//! escaping, still read) and the HISTORY lines.

use std::ffi::{CStr, CString};
use std::os::raw::{c_char, c_int};
use std::ptr;

use fitsio::sys;

use super::hdu::HduSummary;
use super::{KEY_NO_EXIST, MAX_PROVENANCE_ENTRIES};
use crate::catalogue::cfitsio::{ok, status_text, FitsHandle};
use crate::catalogue::{ascii, Provenance};

// ---------------------------------------------------------------------------------------------
// Header and table calls on the shared cfitsio handle
// ---------------------------------------------------------------------------------------------

impl FitsHandle {
    /// Close, reporting the status of the final flush.
    /// Move to HDU `index` (0 = primary); returns the HDU type.
    /// A keyword's value as text (long-string convention understood), `None` if absent.
    pub(super) fn key_text(&self, key: &str) -> Result<Option<String>, c_int> {
        let c_key = CString::new(key).expect("keyword names have no NUL");
        let mut value: *mut c_char = ptr::null_mut();
        let mut status = 0;
        // SAFETY: open handle; cfitsio allocates `value`, freed below with fffree.
        unsafe {
            sys::ffgkls(
                self.raw(),
                c_key.as_ptr(),
                &mut value,
                ptr::null_mut(),
                &mut status,
            )
        };
        let text = if value.is_null() {
            None
        } else {
            // SAFETY: cfitsio returns a NUL-terminated string it allocated.
            let text = unsafe { CStr::from_ptr(value) }.to_bytes().to_vec();
            let mut free_status = 0;
            unsafe { sys::fffree(value as *mut _, &mut free_status) };
            Some(text)
        };
        match status {
            0 => Ok(text.map(|t| String::from_utf8_lossy(&t).into_owned())),
            KEY_NO_EXIST => Ok(None),
            s => Err(s),
        }
    }

    pub(super) fn write_key_text(
        &self,
        key: &str,
        value: &str,
        comment: Option<&str>,
    ) -> Result<(), c_int> {
        let c_key = CString::new(key).expect("keyword names have no NUL");
        // Callers pass printable ASCII only.
        let c_value = CString::new(value).expect("checked header text has no NUL");
        let c_comment = comment.map(|c| CString::new(c).expect("comments have no NUL"));
        let mut status = 0;
        // SAFETY: open handle, valid C strings (comment may be NULL).
        unsafe {
            sys::ffpkls(
                self.raw(),
                c_key.as_ptr(),
                c_value.as_ptr(),
                c_comment.as_ref().map_or(ptr::null(), |c| c.as_ptr()),
                &mut status,
            )
        };
        ok(status)
    }
}

/// Read the provenance cards: `PROVnnn` (`key: value`) in order, stopping at the first
/// missing number; a header without `PROV001` is read in the earlier layout, `PRVKnnn`
/// (key) and `PRVVnnn` (value), %-escaped.
pub(super) fn read_provenance_cards(
    file: &FitsHandle,
    hdu: &HduSummary,
) -> Result<Provenance, String> {
    let here = hdu.label();
    let read = |card: &str| {
        file.key_text(card)
            .map_err(|s| format!("{here}: cannot read keyword {card}: {}", status_text(s)))
    };
    let mut entries = Vec::new();
    for i in 1..=MAX_PROVENANCE_ENTRIES {
        let card = provenance_keyword(i);
        let Some(text) = read(&card)? else { break };
        let (key, value) = match text.split_once(": ") {
            Some((k, v)) => (k.to_string(), v.to_string()),
            None => match text.strip_suffix(':') {
                Some(k) => (k.to_string(), String::new()),
                None => {
                    return Err(format!(
                        "{here}: keyword {card} = '{text}' is not 'key: value'"
                    ))
                }
            },
        };
        let value = if ascii::is_json(&value) {
            ascii::json_from_ascii(&value)
        } else {
            value
        };
        entries.push((key, value));
    }
    if !entries.is_empty() {
        return Ok(Provenance { entries });
    }
    for i in 1..=MAX_PROVENANCE_ENTRIES {
        let (key_card, value_card) = (format!("PRVK{i:03}"), format!("PRVV{i:03}"));
        let Some(key) = read(&key_card)? else { break };
        let value = read(&value_card)?
            .ok_or_else(|| format!("{here}: keyword {key_card} has no matching {value_card}"))?;
        let decode = |card: &str, text: &str| {
            unescape(text).ok_or_else(|| {
                format!("{here}: keyword {card}: the %-escaped text does not decode to UTF-8")
            })
        };
        entries.push((decode(&key_card, &key)?, decode(&value_card, &value)?));
    }
    Ok(Provenance { entries })
}

pub(super) fn header_text_ok(s: &str) -> bool {
    s.bytes().all(|b| (0x20..=0x7e).contains(&b))
}

fn provenance_keyword(i: usize) -> String {
    format!("PROV{i:03}")
}

/// Header cards (keyword, `key: value` text, comment) for the provenance entries: printable
/// ASCII ([`ascii::to_ascii`]; JSON values by [`ascii::json_to_ascii`], exact).
pub(super) fn provenance_cards(
    provenance: &Provenance,
) -> Result<Vec<(String, String, &'static str)>, String> {
    if provenance.entries.len() > MAX_PROVENANCE_ENTRIES {
        return Err(format!(
            "{} provenance entries; a FITS header stores at most {MAX_PROVENANCE_ENTRIES}",
            provenance.entries.len()
        ));
    }
    let mut cards = Vec::with_capacity(provenance.entries.len());
    for (i, (key, value)) in provenance.entries.iter().enumerate() {
        let key = ascii::to_ascii(key);
        if key.contains(": ") || key.is_empty() {
            return Err(format!(
                "provenance key '{key}' cannot go in a PROVnnn card (empty, or holding ': ')"
            ));
        }
        let value = if ascii::is_json(value) {
            ascii::json_to_ascii(value)
        } else {
            ascii::to_ascii(value)
        };
        cards.push((
            provenance_keyword(i + 1),
            format!("{key}: {value}"),
            "provenance",
        ));
    }
    Ok(cards)
}

/// HISTORY lines a person reads: the software and step, then one line per short setting
/// (structured values and the run record stay in the PROVnnn cards only).
pub(super) fn history_lines(provenance: &Provenance) -> Vec<String> {
    let software = provenance.get("software").unwrap_or("flowsift");
    let step = provenance.get("stage").unwrap_or("");
    let lead = format!("{software} {step}").trim().to_string();
    provenance
        .entries
        .iter()
        .filter(|(k, v)| {
            !matches!(k.as_str(), "software" | "stage" | "record")
                && !ascii::is_json(v)
                && v.chars().count() <= 200
        })
        .map(|(k, v)| ascii::to_ascii(&format!("{lead}: {k} = {v}")))
        .collect()
}

// ---------------------------------------------------------------------------------------------
// Header text escaping
// ---------------------------------------------------------------------------------------------

/// `%XX`-escape `%`, bytes outside printable ASCII and trailing blanks (the earlier
/// layout's writer, kept for the tests of its reader).
#[cfg(test)]
fn escape(text: &str) -> String {
    let bytes = text.as_bytes();
    let keep = bytes.iter().rposition(|&b| b != b' ').map_or(0, |p| p + 1);
    let mut out = String::with_capacity(bytes.len());
    for (i, &b) in bytes.iter().enumerate() {
        if b == b'%' || !(0x20..=0x7e).contains(&b) || i >= keep {
            out.push_str(&format!("%{b:02X}"));
        } else {
            out.push(b as char);
        }
    }
    out
}

fn hex_digit(b: u8) -> Option<u8> {
    (b as char).to_digit(16).map(|d| d as u8)
}

/// Undo [`escape`]; a `%` not followed by two hex digits is kept as it is. `None` if the
/// result is not UTF-8.
fn unescape(text: &str) -> Option<String> {
    let bytes = text.as_bytes();
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] == b'%' && i + 2 < bytes.len() {
            if let (Some(hi), Some(lo)) = (hex_digit(bytes[i + 1]), hex_digit(bytes[i + 2])) {
                out.push(hi * 16 + lo);
                i += 3;
                continue;
            }
        }
        out.push(bytes[i]);
        i += 1;
    }
    String::from_utf8(out).ok()
}
#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_round_trips() {
        for s in [
            "",
            "plain",
            "50% off",
            "trailing  ",
            "  leading",
            "é ü ∑",
            "a'b\"c",
            "%zz",
            "%4",
        ] {
            assert_eq!(unescape(&escape(s)).as_deref(), Some(s), "{s:?}");
            assert!(header_text_ok(&escape(s)));
        }
        assert_eq!(escape("a b "), "a b%20");
        assert_eq!(escape("100%"), "100%25");
        assert_eq!(unescape("%zz%4").as_deref(), Some("%zz%4"));
    }
}
