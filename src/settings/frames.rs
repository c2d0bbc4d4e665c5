//! Rest-frame choices (CMB dipole or user apex, boost method, Local Group and Galactic
//! apices) and their resolution into boosts.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

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

impl FrameChoice {
    /// The choice with every apex named and the boost stated (for records).
    pub fn filled(&self) -> Result<FrameChoice, String> {
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
