//! Rest-frame choices (CMB dipole or user apex, boost method, the apex of each frame of the
//! chain, the user's own apices) and their resolution into boosts.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::{ApexEntry, SettingsError};

use crate::physics::redshift::{Cmb, GalacticRest, LocalGroup, Lsr, RedshiftKind};
use crate::physics::restframe::{
    apex_table, boost_chain, default_apex, find_apex_in, Apex, Boost, BoostMethod, ChainStep,
};

/// Rest-frame choices as the user gives them.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct FrameChoice {
    /// Named CMB dipole measurement (`planck2018` default, `planck2013`, `cobe-firas`, or a
    /// `cmb` entry of the apex file).
    pub dipole: Option<String>,
    /// User apex for the CMB frame: [speed km/s, Galactic l deg, Galactic b deg].
    pub apex: Option<[f64; 3]>,
    /// Exact boost (default) or the legacy additive correction.
    pub boost: Option<BoostMethod>,
    /// Named Local Group apex (default `courteau-vandenbergh1999`, or a `local-group` entry
    /// of the apex file).
    pub local_group: Option<String>,
    /// Named Galactic-rest apex (default `schoenrich2010-eilers2019`, or a `galactic-rest`
    /// entry of the apex file).
    pub galactic_rest: Option<String>,
    /// Named LSR apex (default `schoenrich2010`, or an `lsr` entry of the apex file).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lsr: Option<String>,
    /// A TOML file of apices of your own (`[[apex]]` tables with frame, name, speed_km_s,
    /// l_deg, b_deg or galactic_xyz_km_s, and source), selectable by name. A relative path in
    /// a run file is taken from the run file's folder.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub apex_file: Option<String>,
    /// Apices of your own written inline (same keys as an apex file's `[[apex]]` tables);
    /// a run record keeps here the apex-file entries it used.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub apices: Vec<ApexEntry>,
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
    /// The user's own apices (apex file or inline), checked, whether used or not.
    pub own_apices: Vec<Apex>,
}

impl ResolvedFrames {
    /// The apices of the chain Sun → LSR → Galactic rest → Local Group → CMB.
    pub fn chain_apices(&self) -> [&Apex; 4] {
        [
            &self.lsr_apex,
            &self.galactic_rest_apex,
            &self.local_group_apex,
            &self.cmb_apex,
        ]
    }

    /// The frame change as its chain of boosts (see [`boost_chain`]).
    pub fn chain(&self) -> Vec<ChainStep> {
        boost_chain(&self.chain_apices())
    }

    /// What makes two runs' frames the same: every apex's numbers and the boost method.
    pub fn signature(&self) -> (Vec<(String, [u64; 3])>, BoostMethod) {
        let apices = self
            .chain_apices()
            .iter()
            .map(|a| {
                (
                    format!("{}:{}", a.frame, a.name),
                    [
                        a.speed_km_s.to_bits(),
                        a.glon_deg.to_bits(),
                        a.glat_deg.to_bits(),
                    ],
                )
            })
            .collect();
        (apices, self.method)
    }
}

impl FrameChoice {
    /// Overlay `other`'s set fields on this one.
    pub fn overlay(&self, other: &FrameChoice) -> FrameChoice {
        let pick = |a: &Option<String>, b: &Option<String>| b.clone().or_else(|| a.clone());
        FrameChoice {
            dipole: pick(&self.dipole, &other.dipole),
            apex: other.apex.or(self.apex),
            boost: other.boost.or(self.boost),
            local_group: pick(&self.local_group, &other.local_group),
            galactic_rest: pick(&self.galactic_rest, &other.galactic_rest),
            lsr: pick(&self.lsr, &other.lsr),
            apex_file: pick(&self.apex_file, &other.apex_file),
            apices: if other.apices.is_empty() {
                self.apices.clone()
            } else {
                other.apices.clone()
            },
        }
    }

    /// The user's own apices, checked (entries are named by their file, else as inline).
    pub fn own_apices(&self) -> Result<Vec<Apex>, SettingsError> {
        self.apices
            .iter()
            .enumerate()
            .map(|(i, e)| {
                let origin = e.file.as_deref().unwrap_or("run file, frame.apices");
                e.to_apex(origin, i + 1)
            })
            .collect()
    }

    /// Resolve names and numbers into boosts.
    pub fn resolve(&self) -> Result<ResolvedFrames, SettingsError> {
        let own_apices = self.own_apices()?;
        let mut table = apex_table();
        table.extend(own_apices.iter().cloned());
        let pick = |frame: &str, name: &Option<String>| match name {
            Some(n) => find_apex_in(&table, frame, n).map_err(SettingsError::UnknownName),
            None => Ok(default_apex(frame)),
        };
        let cmb_apex = match (&self.dipole, &self.apex) {
            (Some(_), Some(_)) => return Err(SettingsError::DipoleAndUserApex),
            (_, Some([v, l, b])) => {
                Apex::user(Cmb::NAME, *v, *l, *b).map_err(SettingsError::UserApex)?
            }
            (name, None) => pick(Cmb::NAME, name)?,
        };
        let local_group_apex = pick(LocalGroup::NAME, &self.local_group)?;
        let galactic_rest_apex = pick(GalacticRest::NAME, &self.galactic_rest)?;
        let lsr_apex = pick(Lsr::NAME, &self.lsr)?;
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
            own_apices,
        })
    }

    /// The choice with every apex named and the boost stated (for records); of the user's
    /// own apices only those used are kept, with the file they came from.
    pub fn filled(&self) -> Result<FrameChoice, SettingsError> {
        let r = self.resolve()?;
        let used = r.chain_apices();
        let apices = self
            .apices
            .iter()
            .filter(|e| {
                used.iter().any(|a| {
                    crate::physics::restframe::observer_frame(&e.frame) == Some(a.frame)
                        && a.name.eq_ignore_ascii_case(e.name.trim())
                })
            })
            .cloned()
            .collect();
        Ok(FrameChoice {
            dipole: self.apex.is_none().then(|| r.cmb_apex.name.clone()),
            apex: self.apex,
            boost: Some(r.method),
            local_group: Some(r.local_group_apex.name.clone()),
            galactic_rest: Some(r.galactic_rest_apex.name.clone()),
            lsr: Some(r.lsr_apex.name.clone()),
            apex_file: self.apex_file.clone(),
            apices,
        })
    }
}
