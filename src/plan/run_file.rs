//! Run files (TOML) read and merged with the flags, flags winning.

use std::path::Path;

use crate::settings::RunConfig;

/// The run file's settings with `flags` on top (no file: the flags alone).
pub fn merge_run_file(run_file: Option<&Path>, flags: &RunConfig) -> Result<RunConfig, String> {
    let file = match run_file {
        Some(p) => {
            let text = std::fs::read_to_string(p).map_err(|e| format!("{}: {e}", p.display()))?;
            RunConfig::from_toml(&text, &p.display().to_string())?
        }
        None => RunConfig::default(),
    };
    Ok(file.overlay(flags))
}
