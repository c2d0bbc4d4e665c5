//! Rest-frame choices (CMB dipole or user apex, boost method, Local Group and Galactic
//! apices) and their resolution into boosts.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::SettingsError;

use crate::physics::redshift::{Cmb, GalacticRest, LocalGroup, Lsr, RedshiftKind};
use crate::physics::restframe::{default_apex, find_apex, Apex, Boost, BoostMethod};

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
    pub fn resolve(&self) -> Result<ResolvedFrames, SettingsError> {
        let cmb_apex = match (&self.dipole, &self.apex) {
            (Some(_), Some(_)) => return Err(SettingsError::DipoleAndUserApex),
            (_, Some([v, l, b])) => {
                Apex::user(Cmb::NAME, *v, *l, *b).map_err(SettingsError::UserApex)?
            }
            (Some(name), None) => find_apex(Cmb::NAME, name).map_err(SettingsError::UnknownName)?,
            (None, None) => default_apex(Cmb::NAME),
        };
        let pick = |frame: &str, name: &Option<String>| match name {
            Some(n) => find_apex(frame, n).map_err(SettingsError::UnknownName),
            None => Ok(default_apex(frame)),
        };
        let local_group_apex = pick(LocalGroup::NAME, &self.local_group)?;
        let galactic_rest_apex = pick(GalacticRest::NAME, &self.galactic_rest)?;
        let lsr_apex = default_apex(Lsr::NAME);
        Ok(ResolvedFrames {
            cmb: Boost::new(&cmb_apex)?,
            cmb_apex,
            method: self.boost.unwrap_or_default(),
            local_group: Boost::new(&local_group_apex)?,
            local_group_apex,
            galactic_rest: Boost::new(&galactic_rest_apex)?,
            galactic_rest_apex,
            lsr: Boost::new(&lsr_apex)?,
            lsr_apex,
        })
    }
}

impl FrameChoice {
    /// The choice with every apex named and the boost stated (for records).
    pub fn filled(&self) -> Result<FrameChoice, SettingsError> {
        let r = self.resolve()?;
        Ok(FrameChoice {
            dipole: self.apex.is_none().then(|| r.cmb_apex.name.clone()),
            apex: self.apex,
            boost: Some(r.method),
            local_group: Some(r.local_group_apex.name.clone()),
            galactic_rest: Some(r.galactic_rest_apex.name.clone()),
        })
    }
}
