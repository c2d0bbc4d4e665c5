//! Which columns of a catalogue play which role, as the user names them, and their units.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::estimators::DistanceKind;
use crate::physics::sky::InputSkyFrame;

/// Redshift column unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum RedshiftUnit {
    /// Dimensionless redshift z.
    Z,
    /// c·z in km/s.
    Cz,
}

/// Angle column unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum AngleUnit {
    Deg,
    Rad,
    /// Text: RA in hours ("hh:mm:ss.s"), Dec in degrees ("±dd:mm:ss.s").
    Sexagesimal,
}

/// Column choices as the user gives them.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ColumnChoice {
    /// Right-ascension column (default `ra`).
    pub ra: Option<String>,
    /// Declination column (default `dec`).
    pub dec: Option<String>,
    /// Heliocentric redshift column (default `z_helio`, or `cz_helio` in km/s).
    pub z: Option<String>,
    /// Unit of the redshift column and its error.
    pub z_unit: Option<RedshiftUnit>,
    /// Redshift-error column (default `z_err`, or `cz_err` for cz).
    pub z_err: Option<String>,
    /// Distance column (default: whichever of `mu`, `dl`, `dc`, `eta` exists).
    pub distance: Option<String>,
    /// What the distance column holds.
    pub distance_kind: Option<DistanceKind>,
    /// Distance-error column (default `<distance>_err`).
    pub distance_err: Option<String>,
    /// Group identifier column (default `group_id`).
    pub group_id: Option<String>,
    /// Unit of ra/dec (default: degrees, or sexagesimal for text columns, or TUNIT).
    pub angle_unit: Option<AngleUnit>,
    /// Sky frame of the position columns (default: by the columns found: `ra`/`dec` ICRS,
    /// `glon`/`glat` Galactic, `sgl`/`sgb` supergalactic).
    pub sky_frame: Option<InputSkyFrame>,
    /// Rest frame of the redshift column (default: by its name, `z_cmb` → cmb …, else
    /// heliocentric).
    pub z_frame: Option<crate::physics::restframe::GivenFrame>,
}

impl ColumnChoice {
    pub fn overlay(&self, o: &ColumnChoice) -> ColumnChoice {
        ColumnChoice {
            ra: o.ra.clone().or_else(|| self.ra.clone()),
            dec: o.dec.clone().or_else(|| self.dec.clone()),
            z: o.z.clone().or_else(|| self.z.clone()),
            z_unit: o.z_unit.or(self.z_unit),
            z_err: o.z_err.clone().or_else(|| self.z_err.clone()),
            distance: o.distance.clone().or_else(|| self.distance.clone()),
            distance_kind: o.distance_kind.or(self.distance_kind),
            distance_err: o.distance_err.clone().or_else(|| self.distance_err.clone()),
            group_id: o.group_id.clone().or_else(|| self.group_id.clone()),
            angle_unit: o.angle_unit.or(self.angle_unit),
            sky_frame: o.sky_frame.or(self.sky_frame),
            z_frame: o.z_frame.or(self.z_frame),
        }
    }
}
