//! User choices (from flags or a run file), and their resolution into validated physics
//! objects. Parse, then resolve, then run: nothing downstream re-checks these.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::cosmology::{find_preset, Cosmology, CosmologyParams, LengthUnit};
use crate::physics::estimators::DlConvention;
use crate::physics::redshift::{Cmb, GalacticRest, LocalGroup, Lsr, RedshiftKind};
use crate::physics::restframe::{default_apex, find_apex, Apex, Boost, BoostMethod};

/// Cosmology as the user gives it: a preset and/or explicit parameters (explicit win).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CosmologyChoice {
    /// Named preset (`common`, `planck2018`). Default: `common` (flat ΛCDM, H0 = 70,
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
    pub fn resolve(&self) -> Result<ResolvedCosmology, String> {
        let preset = find_preset(self.preset.as_deref().unwrap_or("common"))?;
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
        params.validate().map_err(|e| e.to_string())?;
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
    pub fn build(&self, z_needed: f64) -> Result<Cosmology, String> {
        let c = Cosmology::new(self.params).map_err(|e| e.to_string())?;
        c.ensure_covers(z_needed).map_err(|e| e.to_string())?;
        Ok(c)
    }
}

/// Rest-frame choices as the user gives them.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct FrameChoice {
    /// Named CMB dipole (`planck2018` default, `cobe-firas`).
    pub dipole: Option<String>,
    /// User apex for the CMB frame: [speed km/s, Galactic l deg, Galactic b deg].
    pub apex: Option<[f64; 3]>,
    /// Exact boost (default) or the legacy additive correction.
    pub boost: Option<BoostMethod>,
    /// Named Local Group apex (default `courteau-vandenbergh1999`).
    pub local_group: Option<String>,
    /// Named Galactic-standard-of-rest apex (default `schoenrich2010-eilers2019`).
    pub galactic_rest: Option<String>,
}

/// Every boost a run needs, built once, with the apices for provenance.
#[derive(Debug, Clone)]
pub struct ResolvedFrames {
    pub cmb_apex: Apex,
    pub cmb: Boost<Cmb>,
    pub method: BoostMethod,
    pub local_group_apex: Apex,
    pub local_group: Boost<LocalGroup>,
    pub galactic_rest_apex: Apex,
    pub galactic_rest: Boost<GalacticRest>,
    pub lsr_apex: Apex,
    pub lsr: Boost<Lsr>,
}

impl FrameChoice {
    /// Overlay `other`'s set fields on this one.
    pub fn overlay(&self, other: &FrameChoice) -> FrameChoice {
        FrameChoice {
            dipole: other.dipole.clone().or_else(|| self.dipole.clone()),
            apex: other.apex.or(self.apex),
            boost: other.boost.or(self.boost),
            local_group: other
                .local_group
                .clone()
                .or_else(|| self.local_group.clone()),
            galactic_rest: other
                .galactic_rest
                .clone()
                .or_else(|| self.galactic_rest.clone()),
        }
    }

    /// Resolve names and numbers into boosts.
    pub fn resolve(&self) -> Result<ResolvedFrames, String> {
        let cmb_apex = match (&self.dipole, &self.apex) {
            (Some(_), Some(_)) => {
                return Err("give either a named dipole or a user apex, not both".into())
            }
            (_, Some([v, l, b])) => {
                Apex::user(Cmb::NAME, *v, *l, *b).map_err(|e| format!("user apex: {e}"))?
            }
            (Some(name), None) => find_apex(Cmb::NAME, name)?,
            (None, None) => default_apex(Cmb::NAME),
        };
        let pick = |frame: &str, name: &Option<String>| match name {
            Some(n) => find_apex(frame, n),
            None => Ok(default_apex(frame)),
        };
        let local_group_apex = pick(LocalGroup::NAME, &self.local_group)?;
        let galactic_rest_apex = pick(GalacticRest::NAME, &self.galactic_rest)?;
        let lsr_apex = default_apex(Lsr::NAME);
        let err = |e: crate::physics::PhysicsError| e.to_string();
        Ok(ResolvedFrames {
            cmb: Boost::new(&cmb_apex).map_err(err)?,
            cmb_apex,
            method: self.boost.unwrap_or_default(),
            local_group: Boost::new(&local_group_apex).map_err(err)?,
            local_group_apex,
            galactic_rest: Boost::new(&galactic_rest_apex).map_err(err)?,
            galactic_rest_apex,
            lsr: Boost::new(&lsr_apex).map_err(err)?,
            lsr_apex,
        })
    }
}

/// Conventions recorded with every output.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ConventionChoice {
    /// Luminosity-distance convention (default `observed`).
    pub dl_convention: Option<DlConvention>,
    /// Unit of input and output distances (default `mpc`).
    pub length_unit: Option<LengthUnit>,
    /// Intrinsic velocity dispersion σ_* added to velocity errors, km/s (default 0).
    pub sigma_star: Option<f64>,
}

impl ConventionChoice {
    /// Overlay `other`'s set fields on this one.
    pub fn overlay(&self, other: &ConventionChoice) -> ConventionChoice {
        ConventionChoice {
            dl_convention: other.dl_convention.or(self.dl_convention),
            length_unit: other.length_unit.or(self.length_unit),
            sigma_star: other.sigma_star.or(self.sigma_star),
        }
    }
}

/// Cautions printed with results, so that assumptions are never silent.
pub fn cautions(
    cosmology: &ResolvedCosmology,
    frames: &ResolvedFrames,
    convention: DlConvention,
) -> Vec<String> {
    let mut out = vec![
        format!(
            "Cosmological redshifts assume {} (H0 = {} km/s/Mpc, Ω_m = {}, Ω_de = {}, Ω_k = {:.3e}); peculiar velocities scale with this choice, most strongly through H0 against the distance zero point.",
            cosmology.source, cosmology.params.h0, cosmology.params.omega_m, cosmology.params.omega_de, cosmology.omega_k
        ),
        format!(
            "CMB frame from the '{}' apex ({:.2} km/s towards l = {}°, b = {}°).",
            frames.cmb_apex.name, frames.cmb_apex.speed_km_s, frames.cmb_apex.glon_deg, frames.cmb_apex.glat_deg
        ),
        format!("Luminosity-distance convention: {} (see README, 'Conventions').", convention.name()),
    ];
    if frames.method == BoostMethod::LegacyAdditive {
        out.push("Legacy additive frame correction (cz + v cos θ) in use: it omits the (1 + z) factor, an error ≈ v z.".into());
    }
    out
}
