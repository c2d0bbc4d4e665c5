//! The cosmology as the user gives it (a preset and/or parameters), and its resolution.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::SettingsError;

use crate::physics::cosmology::{find_preset, Cosmology, CosmologyParams};

/// Cosmology as the user gives it: a preset and/or explicit parameters (explicit win).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CosmologyChoice {
    /// Named preset (`concordance`, `planck2018`). Default: `concordance` (flat ΛCDM, H0 = 70,
    /// Ω_m = 0.3; common practice).
    pub preset: Option<String>,
    /// Hubble constant, km/s/Mpc.
    pub h0: Option<f64>,
    /// Matter density Ω_m.
    pub omega_m: Option<f64>,
    /// Dark-energy density Ω_de. When omitted the model is flat: Ω_de = 1 − Ω_m − Ω_r.
    pub omega_de: Option<f64>,
    /// Radiation density Ω_r (default 0).
    pub omega_r: Option<f64>,
    /// CPL w0 (default −1).
    pub w0: Option<f64>,
    /// CPL wa (default 0).
    pub wa: Option<f64>,
}

/// A resolved cosmology with a description of where it came from.
#[derive(Debug, Clone, Serialize)]
pub struct ResolvedCosmology {
    pub params: CosmologyParams,
    pub omega_k: f64,
    pub source: String,
}

impl CosmologyChoice {
    /// Overlay `other`'s set fields on this one (flags over file).
    pub fn overlay(&self, other: &CosmologyChoice) -> CosmologyChoice {
        CosmologyChoice {
            preset: other.preset.clone().or_else(|| self.preset.clone()),
            h0: other.h0.or(self.h0),
            omega_m: other.omega_m.or(self.omega_m),
            omega_de: other.omega_de.or(self.omega_de),
            omega_r: other.omega_r.or(self.omega_r),
            w0: other.w0.or(self.w0),
            wa: other.wa.or(self.wa),
        }
    }

    /// Resolve to parameters. A flat model is kept flat when only Ω_m (or Ω_r) changes.
    pub fn resolve(&self) -> Result<ResolvedCosmology, SettingsError> {
        let preset = find_preset(self.preset.as_deref().unwrap_or("concordance"))
            .map_err(SettingsError::UnknownName)?;
        let base = preset.params;
        let omega_m = self.omega_m.unwrap_or(base.omega_m);
        let omega_r = self.omega_r.unwrap_or(base.omega_r);
        let omega_de = self.omega_de.unwrap_or(1.0 - omega_m - omega_r);
        let params = CosmologyParams {
            h0: self.h0.unwrap_or(base.h0),
            omega_m,
            omega_de,
            omega_r,
            w0: self.w0.unwrap_or(base.w0),
            wa: self.wa.unwrap_or(base.wa),
        };
        params.validate()?;
        let changed = params != base;
        let source = if changed {
            format!(
                "user parameters (starting from preset '{}': {})",
                preset.name, preset.source
            )
        } else {
            format!("preset '{}': {}", preset.name, preset.source)
        };
        Ok(ResolvedCosmology {
            omega_k: params.omega_k(),
            params,
            source,
        })
    }
}

impl ResolvedCosmology {
    /// Build the distance tables and check they reach `z_needed`.
    pub fn build(&self, z_needed: f64) -> Result<Cosmology, SettingsError> {
        let c = Cosmology::new(self.params)?;
        c.ensure_covers(z_needed)?;
        Ok(c)
    }
}

impl CosmologyChoice {
    /// The choice with every parameter written out as the value used (for records).
    pub fn filled(&self) -> Result<CosmologyChoice, SettingsError> {
        let r = self.resolve()?;
        Ok(CosmologyChoice {
            preset: Some(self.preset.clone().unwrap_or_else(|| "concordance".into())),
            h0: Some(r.params.h0),
            omega_m: Some(r.params.omega_m),
            omega_de: Some(r.params.omega_de),
            omega_r: Some(r.params.omega_r),
            w0: Some(r.params.w0),
            wa: Some(r.params.wa),
        })
    }
}
