//! The settings every command shares, resolved once: cosmology, rest frames, conventions,
//! and the record of the input they may have been inherited from.

use std::path::Path;

use crate::catalogue::record::{ApexRecord, InputFile, RunRecord};
use crate::physics::estimators::DlConvention;
use crate::settings::{cautions, ResolvedCosmology, ResolvedFrames, RunConfig};

use super::inherit::{settle, Settled};

/// Cosmology, frames and conventions of one run, resolved and checked.
#[derive(Debug, Clone)]
pub struct Shared {
    /// The settled settings (record, run file, flags).
    pub config: RunConfig,
    pub cosmology: ResolvedCosmology,
    pub frames: ResolvedFrames,
    pub convention: DlConvention,
    /// Intrinsic scatter σ_*, km/s (0 when not given).
    pub sigma_star: f64,
    /// The input's own record (the chain of steps that made it), if it is a flowsift output.
    pub previous: Option<RunRecord>,
    /// Settings given against the input's record.
    pub overridden: Vec<String>,
    /// The step whose recorded settings were taken.
    pub inherited_from: Option<String>,
}

impl Shared {
    /// Settle `user` against the record of `input` (when it has one) and resolve.
    pub fn resolve(
        input: Option<&Path>,
        hdu: Option<&str>,
        user: &RunConfig,
        allow_override: bool,
    ) -> Result<Shared, super::PlanError> {
        let previous = match input {
            Some(p) if p.exists() => {
                crate::catalogue::read_record(p, hdu).map_err(|e| e.to_string())?
            }
            _ => None,
        };
        let name = input.map(|p| p.display().to_string()).unwrap_or_default();
        Self::resolve_with_record(previous, &name, user, allow_override)
    }

    /// Settle `user` against `previous`, the record of the input called `name` (a file, or a
    /// table in memory whose metadata carried it), and resolve.
    pub fn resolve_with_record(
        previous: Option<RunRecord>,
        name: &str,
        user: &RunConfig,
        allow_override: bool,
    ) -> Result<Shared, super::PlanError> {
        let mut user = user.clone();
        user.frame = super::apex_file::with_apex_file(&user.frame)?;
        let user = &user;
        let Settled {
            config,
            overridden,
            inherited_from,
        } = settle(previous.as_ref(), user, allow_override, name)?;
        let cosmology = config
            .cosmology
            .resolve()
            .map_err(|e| format!("cosmology: {e}"))?;
        let frames = config
            .frame
            .resolve()
            .map_err(|e| format!("rest frame: {e}"))?;
        let sigma_star = config.conventions.sigma_star.unwrap_or(0.0);
        if !(sigma_star.is_finite() && sigma_star >= 0.0) {
            return Err(format!(
                "sigma_star must be a non-negative number of km/s, got {sigma_star}"
            )
            .into());
        }
        Ok(Shared {
            convention: config.conventions.dl_convention.unwrap_or_default(),
            sigma_star,
            config,
            cosmology,
            frames,
            previous,
            overridden,
            inherited_from,
        })
    }

    /// The cautions every run prints: the assumed cosmology, apex and convention, and where
    /// the settings came from.
    pub fn cautions(&self) -> Vec<String> {
        let mut out = cautions(&self.cosmology, &self.frames, self.convention);
        if let Some(step) = &self.inherited_from {
            out.push(format!(
                "Cosmology, rest frames, conventions and columns are those recorded with the input (its `{step}` step)."
            ));
        }
        for o in &self.overridden {
            out.push(format!("Overridden against the input's record: {o}."));
        }
        out
    }

    /// A record for `step` with these settings filled in, the input's record nested.
    pub fn record(&self, step: &str, command: &str, inputs: &[(&str, &Path)]) -> RunRecord {
        let mut r = RunRecord::new(step, command, &crate::catalogue::clock::now_utc());
        r.inputs = inputs
            .iter()
            .map(|(role, p)| InputFile {
                role: role.to_string(),
                path: p.display().to_string(),
            })
            .collect();
        r.settings.cosmology = self
            .config
            .cosmology
            .filled()
            .unwrap_or_else(|_| self.config.cosmology.clone());
        r.settings.frame = self
            .config
            .frame
            .filled()
            .unwrap_or_else(|_| self.config.frame.clone());
        r.settings.conventions = self.config.conventions.filled();
        r.cosmology_source = Some(self.cosmology.source.clone());
        let a = &self.frames.cmb_apex;
        r.cmb_apex = Some(ApexRecord {
            name: a.name.clone(),
            speed_km_s: a.speed_km_s,
            glon_deg: a.glon_deg,
            glat_deg: a.glat_deg,
            source: a.source.clone(),
        });
        // Every apex of the chain with its numbers and source; a user apex file by path
        // (its entries used are also kept in settings.frame.apices).
        let apices: Vec<_> = self
            .frames
            .chain_apices()
            .into_iter()
            .map(|a| {
                serde_json::json!({
                    "frame": a.frame, "name": a.name, "speed_km_s": a.speed_km_s,
                    "glon_deg": a.glon_deg, "glat_deg": a.glat_deg, "source": a.source,
                    "file": a.file,
                })
            })
            .collect();
        r.details.insert(
            "apices_used".into(),
            serde_json::Value::Array(apices).to_string(),
        );
        if let Some(f) = &self.config.frame.apex_file {
            r.details.insert("apex_file".into(), f.clone());
        }
        r.overridden = self.overridden.clone();
        r.previous = self.previous.clone().map(Box::new);
        r
    }
}
