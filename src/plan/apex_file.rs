//! The user's apex file read and its entries put into the frame choice, so that the choice
//! resolves on its own (and a run record keeps the entries it used).

use crate::settings::{parse_apex_file, FrameChoice};

use super::PlanError;

/// `choice` with the entries of its `apex_file` (if any) added to its own apices. Entries
/// read earlier from the same file are replaced, so reading twice changes nothing.
pub fn with_apex_file(choice: &FrameChoice) -> Result<FrameChoice, PlanError> {
    let Some(path) = &choice.apex_file else {
        return Ok(choice.clone());
    };
    let text = std::fs::read_to_string(path)
        .map_err(|e| format!("apex file {path}: cannot read it: {e}"))?;
    let entries = parse_apex_file(&text, path)?;
    let mut out = choice.clone();
    out.apices
        .retain(|e| e.file.as_deref() != Some(path.as_str()));
    out.apices.extend(entries);
    // Inline entries and file entries must not share a name within a frame.
    out.own_apices()?;
    let mut seen: Vec<(String, String)> = vec![];
    for e in &out.apices {
        let key = (
            e.frame.trim().to_ascii_lowercase(),
            e.name.trim().to_ascii_lowercase(),
        );
        if seen.contains(&key) {
            return Err(format!(
                "apex file {path}: the {} apex '{}' is also defined inline in the run file \
                 (frame.apices); keep one",
                e.frame, e.name
            )
            .into());
        }
        seen.push(key);
    }
    Ok(out)
}
