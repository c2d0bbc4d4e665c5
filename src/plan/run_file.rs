//! Run files (TOML) read and merged with the flags, flags winning.

use std::path::Path;

use crate::settings::RunConfig;

/// The run file's settings with `flags` on top (no file: the flags alone).
pub fn merge_run_file(
    run_file: Option<&Path>,
    flags: &RunConfig,
) -> Result<RunConfig, super::PlanError> {
    let file = match run_file {
        Some(p) => {
            let text = std::fs::read_to_string(p).map_err(|e| format!("{}: {e}", p.display()))?;
            let mut cfg = RunConfig::from_toml(&text, &p.display().to_string())?;
            // An apex file named in a run file is found beside the run file.
            if let (Some(f), Some(dir)) = (&cfg.frame.apex_file, p.parent()) {
                if Path::new(f).is_relative() {
                    cfg.frame.apex_file = Some(dir.join(f).display().to_string());
                }
            }
            cfg
        }
        None => RunConfig::default(),
    };
    Ok(file.overlay(flags))
}

/// Check a run file as a run would, without data: it parses, its cosmology and frames
/// resolve, its counts and stage settings are in range.
pub fn check_run_file(path: &Path) -> Result<RunConfig, super::PlanError> {
    let cfg = merge_run_file(Some(path), &RunConfig::default())?;
    let at = |e: super::PlanError| format!("{}: {e}", path.display());
    super::common::Shared::resolve(None, None, &cfg, false).map_err(at)?;
    super::velocities::check_settings(&cfg).map_err(at)?;
    Ok(cfg)
}
