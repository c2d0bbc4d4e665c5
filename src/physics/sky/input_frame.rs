//! The sky frame a catalogue's positions are given in, as one value the plan can hold: every
//! supported frame converts a (longitude, latitude) pair to ICRS and back.

use std::sync::OnceLock;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::fk_systems::{cached_icrs_to_fk5, fk4_to_icrs, icrs_to_fk4};
use super::{Direction, Fk4, Fk5, Galactic, Icrs, SkyFrame, SkyRotations, Supergalactic};
use crate::physics::PhysicsError;

/// The sky frame of a catalogue's positions.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum InputSkyFrame {
    /// ICRS right ascension and declination.
    #[default]
    Icrs,
    /// FK5 right ascension and declination, mean equator and equinox of J2000.0.
    Fk5,
    /// FK4 right ascension and declination, mean equator and equinox of B1950.0, with the
    /// E-terms of aberration (catalogue places of the IAU 1976 system), epoch B1950.0.
    Fk4,
    /// IAU Galactic longitude and latitude (l, b).
    Galactic,
    /// Supergalactic longitude and latitude (SGL, SGB).
    Supergalactic,
}

fn rotations() -> &'static SkyRotations {
    static ROTATIONS: OnceLock<SkyRotations> = OnceLock::new();
    ROTATIONS.get_or_init(SkyRotations::default)
}

impl InputSkyFrame {
    /// Every frame, in the order messages list them.
    pub const ALL: [InputSkyFrame; 5] = [
        InputSkyFrame::Icrs,
        InputSkyFrame::Fk5,
        InputSkyFrame::Fk4,
        InputSkyFrame::Galactic,
        InputSkyFrame::Supergalactic,
    ];

    /// The frame's name in flags, run files and provenance (the same as its
    /// [`SkyFrame::NAME`]).
    pub fn name(self) -> &'static str {
        match self {
            InputSkyFrame::Icrs => Icrs::NAME,
            InputSkyFrame::Fk5 => Fk5::NAME,
            InputSkyFrame::Fk4 => Fk4::NAME,
            InputSkyFrame::Galactic => Galactic::NAME,
            InputSkyFrame::Supergalactic => Supergalactic::NAME,
        }
    }

    /// A frame from its name (`icrs`, `fk5`, `fk4`, `galactic`, `supergalactic`; ASCII case
    /// and surrounding spaces ignored).
    pub fn parse(text: &str) -> Result<Self, PhysicsError> {
        let t = text.trim();
        Self::ALL
            .into_iter()
            .find(|f| f.name().eq_ignore_ascii_case(t))
            .ok_or_else(|| PhysicsError::Unparseable {
                quantity: "sky frame",
                text: text.to_string(),
                reason: "expected one of icrs, fk5, fk4, galactic, supergalactic".to_string(),
            })
    }

    /// Whether the frame is equatorial: its longitude is a right ascension, written in hours
    /// when given as sexagesimal text.
    pub fn is_equatorial(self) -> bool {
        matches!(
            self,
            InputSkyFrame::Icrs | InputSkyFrame::Fk5 | InputSkyFrame::Fk4
        )
    }

    /// The ICRS direction of a position (longitude, latitude in degrees) given in this frame.
    /// Errors as [`Direction::from_lon_lat_deg`]: a non-finite value or a latitude outside
    /// [−90°, 90°].
    pub fn to_icrs(self, lon_deg: f64, lat_deg: f64) -> Result<Direction<Icrs>, PhysicsError> {
        let r = rotations();
        Ok(match self {
            InputSkyFrame::Icrs => Direction::<Icrs>::from_lon_lat_deg(lon_deg, lat_deg)?,
            InputSkyFrame::Fk5 => cached_icrs_to_fk5()
                .inverse()
                .apply(&Direction::<Fk5>::from_lon_lat_deg(lon_deg, lat_deg)?),
            InputSkyFrame::Fk4 => {
                fk4_to_icrs(Direction::<Fk4>::from_lon_lat_deg(lon_deg, lat_deg)?)
            }
            InputSkyFrame::Galactic => r
                .icrs_to_galactic
                .inverse()
                .apply(&Direction::<Galactic>::from_lon_lat_deg(lon_deg, lat_deg)?),
            InputSkyFrame::Supergalactic => r.icrs_to_supergalactic.inverse().apply(
                &Direction::<Supergalactic>::from_lon_lat_deg(lon_deg, lat_deg)?,
            ),
        })
    }

    /// (ra, dec) in ICRS, degrees (ra in [0°, 360°)), of a position given in this frame.
    pub fn to_icrs_deg(self, lon_deg: f64, lat_deg: f64) -> Result<(f64, f64), PhysicsError> {
        Ok(self.to_icrs(lon_deg, lat_deg)?.lon_lat_deg())
    }

    /// (longitude, latitude) in this frame, degrees (longitude in [0°, 360°)), of an ICRS
    /// position: the inverse of [`InputSkyFrame::to_icrs_deg`].
    pub fn from_icrs_deg(self, ra_deg: f64, dec_deg: f64) -> Result<(f64, f64), PhysicsError> {
        let d = Direction::<Icrs>::from_lon_lat_deg(ra_deg, dec_deg)?;
        let r = rotations();
        Ok(match self {
            InputSkyFrame::Icrs => d.lon_lat_deg(),
            InputSkyFrame::Fk5 => cached_icrs_to_fk5().apply(&d).lon_lat_deg(),
            InputSkyFrame::Fk4 => icrs_to_fk4(d).lon_lat_deg(),
            InputSkyFrame::Galactic => r.icrs_to_galactic.apply(&d).lon_lat_deg(),
            InputSkyFrame::Supergalactic => r.icrs_to_supergalactic.apply(&d).lon_lat_deg(),
        })
    }
}

impl std::fmt::Display for InputSkyFrame {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_parse_back_and_bad_names_are_refused() {
        for f in InputSkyFrame::ALL {
            assert_eq!(InputSkyFrame::parse(f.name()), Ok(f));
            assert_eq!(InputSkyFrame::parse(&f.name().to_uppercase()), Ok(f));
        }
        let e = InputSkyFrame::parse("b1950").unwrap_err();
        assert!(e.to_string().contains("fk4"), "{e}");
        assert!(InputSkyFrame::Fk4.to_icrs_deg(10.0, 91.0).is_err());
        assert!(InputSkyFrame::Galactic.to_icrs_deg(f64::NAN, 0.0).is_err());
        assert!(InputSkyFrame::Fk5
            .from_icrs_deg(0.0, f64::INFINITY)
            .is_err());
    }
}
