//! Conventions recorded with every output: luminosity-distance convention, length unit,
//! intrinsic scatter.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::cosmology::LengthUnit;
use crate::physics::estimators::DlConvention;
use crate::physics::restframe::BoostMethod;

use super::{ResolvedCosmology, ResolvedFrames};

/// Conventions recorded with every output.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ConventionChoice {
    /// Luminosity-distance convention (default `full`).
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

impl ConventionChoice {
    /// Every convention as the value used (for records).
    pub fn filled(&self) -> ConventionChoice {
        ConventionChoice {
            dl_convention: Some(self.dl_convention.unwrap_or_default()),
            length_unit: Some(self.length_unit.unwrap_or_default()),
            sigma_star: Some(self.sigma_star.unwrap_or(0.0)),
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
            "Cosmological redshifts assume {} (H0 = {} km/s/Mpc, Ω_m = {}, Ω_de = {}, Ω_k = {}); peculiar velocities scale with this choice, most strongly through H0 against the distance zero point.",
            cosmology.source,
            super::short_number(cosmology.params.h0),
            super::short_number(cosmology.params.omega_m),
            super::short_number(cosmology.params.omega_de),
            super::short_number(cosmology.omega_k)
        ),
        format!(
            "CMB frame from the '{}' apex ({:.2} km/s towards l = {}°, b = {}°).",
            frames.cmb_apex.name, frames.cmb_apex.speed_km_s, frames.cmb_apex.glon_deg, frames.cmb_apex.glat_deg
        ),
        match convention {
            DlConvention::Full => "Luminosity-distance convention: full, D_L = (1 + z_helio)(1 + z_pec) D_M(z_cos) (see README, 'Conventions'); distances calibrated in the observed convention (D_L = (1 + z_helio) D_M(z_cos)) need --dl-convention observed, which gives |v_pec| smaller by a fraction ≈ z (600 km/s becomes 571 at z = 0.05).".to_string(),
            other => format!("Luminosity-distance convention: {} (see README, 'Conventions'); the complete convention (full) would give |v_pec| larger by a fraction ≈ z.", other.name()),
        },
    ];
    for a in &frames.chain_apices()[..3] {
        if a.name != crate::physics::restframe::default_apex(a.frame).name {
            out.push(format!(
                "The {} frame uses the '{}' apex ({:.2} km/s towards l = {}°, b = {}°{}), not the built-in default.",
                a.frame,
                a.name,
                a.speed_km_s,
                a.glon_deg,
                a.glat_deg,
                a.file.as_ref().map(|f| format!("; apex file {f}")).unwrap_or_default()
            ));
        }
    }
    if let Some(f) = &frames.cmb_apex.file {
        out.push(format!(
            "The CMB apex '{}' comes from the apex file {f}.",
            frames.cmb_apex.name
        ));
    }
    if frames.method == BoostMethod::LegacyAdditive {
        out.push("Legacy additive frame correction (cz + v cos θ) in use: it omits the (1 + z) factor, an error ≈ v z.".into());
    }
    out
}
