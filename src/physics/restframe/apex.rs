//! Apices: the Sun's velocity relative to each rest frame, and the one built-in default of
//! each frame (with the CMB dipole measurements, which are a choice of measurement rather
//! than of frame).
//!
//! # Why these defaults
//! A frame change is only as good as the solar motion it assumes, and the published values
//! differ by tens of km/s. flowsift builds in one value per frame, chosen by the notes on
//! [`lsr_default`], [`galactic_rest_default`], [`local_group_default`] and
//! [`cmb_dipoles`]; any other published value is given in an apex file of the user's own
//! (see `demo-data/apices.example.toml`, which lists the common alternatives with their
//! sources) and selected by name.

use serde::Serialize;

use super::super::constants::C_KM_S;
use super::super::redshift::{Cmb, GalacticRest, LocalGroup, Lsr, RedshiftKind};
use super::super::sky::{Direction, Galactic};
use super::super::PhysicsError;

/// The frames defined by an apex, in the order of the chain Sun → LSR → Galactic rest →
/// Local Group → CMB.
pub const OBSERVER_FRAMES: [&str; 4] = [Lsr::NAME, GalacticRest::NAME, LocalGroup::NAME, Cmb::NAME];

/// The frame name `name` as the code spells it (`lsr`, `galactic-rest`, `local-group`,
/// `cmb`), or `None`.
pub fn observer_frame(name: &str) -> Option<&'static str> {
    OBSERVER_FRAMES
        .into_iter()
        .find(|f| f.eq_ignore_ascii_case(name.trim()))
}

/// The Sun's velocity relative to a rest frame: speed and Galactic direction, with source.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Apex {
    /// Short stable name, e.g. `planck2018`.
    pub name: String,
    /// Frame this apex defines (`cmb`, `local-group`, …).
    pub frame: &'static str,
    /// Speed of the Sun relative to the frame, km/s.
    pub speed_km_s: f64,
    /// Galactic longitude of the direction of motion, degrees.
    pub glon_deg: f64,
    /// Galactic latitude of the direction of motion, degrees.
    pub glat_deg: f64,
    /// Published source.
    pub source: String,
    /// The apex file the apex was read from (`None` for a built-in or command-line apex).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub file: Option<String>,
}

impl Apex {
    /// A checked apex from speed (km/s, ≥ 0 and below c) and Galactic l, b (degrees).
    pub fn from_speed_direction(
        name: &str,
        frame: &'static str,
        speed_km_s: f64,
        glon_deg: f64,
        glat_deg: f64,
        source: &str,
    ) -> Result<Self, PhysicsError> {
        if !speed_km_s.is_finite() || speed_km_s < 0.0 {
            return Err(PhysicsError::NotPositive {
                quantity: "apex speed",
                value: speed_km_s,
            });
        }
        if speed_km_s >= C_KM_S {
            return Err(PhysicsError::FasterThanLight { value: speed_km_s });
        }
        Direction::<Galactic>::from_lon_lat_deg(glon_deg, glat_deg)?;
        Ok(Self {
            name: name.into(),
            frame,
            speed_km_s,
            glon_deg,
            glat_deg,
            source: source.into(),
            file: None,
        })
    }

    /// A checked apex from its Galactic Cartesian velocity (km/s; x → l = 0, y → l = 90°,
    /// z → NGP), e.g. a solar motion (U, V, W) with U towards the Galactic centre.
    pub fn from_velocity(
        name: &str,
        frame: &'static str,
        xyz_km_s: [f64; 3],
        source: &str,
    ) -> Result<Self, PhysicsError> {
        let [x, y, z] = xyz_km_s;
        let d = Direction::<Galactic>::from_cartesian(x, y, z)?;
        let (l, b) = d.lon_lat_deg();
        Self::from_speed_direction(name, frame, (x * x + y * y + z * z).sqrt(), l, b, source)
    }

    /// A user-given CMB-frame apex (speed km/s, Galactic l and b in degrees), checked.
    pub fn user(
        frame: &'static str,
        speed_km_s: f64,
        glon_deg: f64,
        glat_deg: f64,
    ) -> Result<Self, PhysicsError> {
        Self::from_speed_direction(
            "user",
            frame,
            speed_km_s,
            glon_deg,
            glat_deg,
            "given on the command line or in the run configuration",
        )
    }

    /// Velocity vector in Galactic Cartesian axes (x → l = 0, y → l = 90°, z → NGP), km/s.
    pub fn velocity_galactic(&self) -> [f64; 3] {
        let d = Direction::<Galactic>::from_lon_lat_deg(self.glon_deg, self.glat_deg)
            .expect("apex directions are validated on construction");
        d.at_distance(self.speed_km_s)
    }
}

/// Solar motion relative to the LSR, (U, V, W) km/s, U towards the Galactic centre, V in
/// the direction of rotation, W towards the NGP.
/// Source: Schönrich, Binney & Dehnen (2010), MNRAS 403, 1829.
pub const SOLAR_MOTION_UVW: [f64; 3] = [11.1, 12.24, 7.25];

/// Circular speed at the Sun, km/s. Source: Eilers et al. (2019), ApJ 871, 120
/// (229.0 ± 0.2 km/s, systematic 2–5%).
pub const CIRCULAR_SPEED_EILERS2019: f64 = 229.0;

/// COBE/FIRAS dipole speed from its temperature amplitude, v = c ΔT / T0 (first order in
/// β, which is how a dipole amplitude defines a speed): Fixsen et al. (1996), ApJ 473, 576,
/// ΔT = 3.372 mK, T0 = 2.728 K.
pub const COBE_FIRAS_SPEED: f64 = C_KM_S * 3.372e-3 / 2.728;

fn built_in(name: &str, frame: &'static str, v: f64, l: f64, b: f64, source: &str) -> Apex {
    Apex {
        name: name.into(),
        frame,
        speed_km_s: v,
        glon_deg: l,
        glat_deg: b,
        source: source.into(),
        file: None,
    }
}

fn built_in_velocity(name: &str, frame: &'static str, xyz: [f64; 3], source: &str) -> Apex {
    Apex::from_velocity(name, frame, xyz, source).expect("built-in solar motions are valid")
}

/// The LSR default: the solar motion of Schönrich, Binney & Dehnen (2010).
///
/// Why this one: earlier solar motions read V off the asymmetric-drift relation of
/// Hipparcos stars, which the metallicity gradient of the disc biases; Schönrich, Binney &
/// Dehnen model that bias and raise V to 12.24 km/s, and their (U, V, W) has since been the
/// usual choice in Galactic work. The remaining disagreement between determinations is a
/// few km/s, which moves an extragalactic cz by at most that much.
pub fn lsr_default() -> Apex {
    built_in_velocity(
        "schoenrich2010",
        Lsr::NAME,
        SOLAR_MOTION_UVW,
        "Schönrich, Binney & Dehnen (2010), MNRAS 403, 1829 (arXiv:0912.3693): (U, V, W) = (11.1, 12.24, 7.25) km/s",
    )
}

/// The Galactic-rest default: the LSR default plus the circular speed at the Sun of Eilers
/// et al. (2019), 229.0 km/s, added to V.
///
/// Why this one: the circular speed is measured, not set by convention: Eilers et al. fit
/// the rotation curve from 5 to 25 kpc with the Jeans equation to red giants with APOGEE
/// spectra and Gaia astrometry, quoting 229.0 ± 0.2 km/s at the Sun with 2–5% systematics.
/// The round 220 km/s of the IAU 1985 recommendation predates Gaia; it is kept as an entry
/// of the example apex file. The two differ by 9 km/s, at most 9 km/s in cz.
pub fn galactic_rest_default() -> Apex {
    let [u, v, w] = SOLAR_MOTION_UVW;
    built_in_velocity(
        "schoenrich2010-eilers2019",
        GalacticRest::NAME,
        [u, v + CIRCULAR_SPEED_EILERS2019, w],
        "Solar motion of Schönrich, Binney & Dehnen (2010), MNRAS 403, 1829, plus the circular speed at the Sun 229.0 km/s of Eilers et al. (2019), ApJ 871, 120",
    )
}

/// The Local-Group default: the Sun's motion relative to the Local Group barycentre of
/// Courteau & van den Bergh (1999), 306 ± 18 km/s towards l = 99° ± 5°, b = −4° ± 4°
/// (journal reference from memory).
///
/// Why this one: it is a fit to the radial velocities of the Local Group members on a
/// reviewed membership list, with stated errors, and later member-based fits agree with it
/// within those errors (the example apex file lists one, 299 ± 15 km/s towards
/// l = 98.4°, b = −5.9°). Older solutions rest on fewer members, and the "300 sin l cos b"
/// line is a rounded convention, not a fit; both are kept in the example apex file. The
/// spread of these solutions is 10–20 km/s in cz.
pub fn local_group_default() -> Apex {
    built_in(
        "courteau-vandenbergh1999",
        LocalGroup::NAME,
        306.0,
        99.0,
        -4.0,
        // The journal reference is from memory.
        "Courteau & van den Bergh (1999), AJ 118, 337: Sun relative to the Local Group barycentre, 306 ± 18 km/s towards l = 99° ± 5°, b = −4° ± 4°",
    )
}

/// The CMB dipole measurements, the default first.
///
/// Why Planck 2018 by default: it is the most precise measurement of the dipole (speed to
/// ± 0.11 km/s, direction to ± 0.01°). The choice of dipole *measurement* is kept
/// selectable (`--dipole`), since reproducing an older sample needs the dipole it used:
/// Planck 2013 and COBE/FIRAS differ from Planck 2018 by under 1 km/s in speed and 0.2° in
/// direction.
pub fn cmb_dipoles() -> Vec<Apex> {
    vec![
        built_in(
            "planck2018",
            Cmb::NAME,
            369.82,
            264.021,
            48.253,
            "Planck Collaboration I (2020), A&A 641, A1 (arXiv:1807.06205), Table 2: amplitude 3362.08 ± 0.99 μK, speed 369.82 ± 0.11 km/s towards l = 264.021° ± 0.011°, b = 48.253° ± 0.005° (speed and amplitude checked against published transcriptions of the table, not the paper itself)",
        ),
        built_in(
            "planck2013",
            Cmb::NAME,
            369.0,
            263.99,
            48.26,
            "Planck Collaboration XXVII (2014), A&A 571, A27, §1: 369 ± 0.9 km/s towards l = 263.99° ± 0.14°, b = 48.26° ± 0.03° (from Kogut et al. 1993; Fixsen et al. 1996; Hinshaw et al. 2009)",
        ),
        built_in(
            "cobe-firas",
            Cmb::NAME,
            COBE_FIRAS_SPEED,
            264.14,
            48.26,
            "Fixsen et al. (1996), ApJ 473, 576 (COBE/FIRAS): dipole 3.372 ± 0.014 mK towards l = 264.14° ± 0.30°, b = 48.26° ± 0.30° (95% CL) on T0 = 2.728 K; speed c·ΔT/T0 = 370.6 km/s",
        ),
    ]
}

/// Every built-in apex, in chain order: one per frame, then the further CMB dipole
/// measurements. The first apex of each frame is its default.
pub fn apex_table() -> Vec<Apex> {
    let mut t = vec![
        lsr_default(),
        galactic_rest_default(),
        local_group_default(),
    ];
    t.extend(cmb_dipoles());
    t
}

/// The apex named `name` for `frame` among `table`, or an error listing the known names.
pub fn find_apex_in(table: &[Apex], frame: &str, name: &str) -> Result<Apex, String> {
    table
        .iter()
        .find(|a| a.frame == frame && a.name.eq_ignore_ascii_case(name))
        .cloned()
        .ok_or_else(|| {
            let known: Vec<_> = table
                .iter()
                .filter(|a| a.frame == frame)
                .map(|a| a.name.clone())
                .collect();
            format!(
                "unknown {frame} apex '{name}'; known: {} (others can be given in an apex file, --apex-file)",
                known.join(", ")
            )
        })
}

/// The built-in apex named `name` for `frame`, or an error listing the known names.
pub fn find_apex(frame: &str, name: &str) -> Result<Apex, String> {
    find_apex_in(&apex_table(), frame, name)
}

/// The default apex of `frame`.
pub fn default_apex(frame: &str) -> Apex {
    apex_table()
        .into_iter()
        .find(|a| a.frame == frame)
        .expect("every observer frame has a default apex")
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Source: Planck Collaboration I (2020), A&A 641, A1 — the default CMB apex.
    #[test]
    fn default_cmb_apex_is_planck2018() {
        let a = default_apex("cmb");
        assert_eq!(a.name, "planck2018");
        assert_eq!(
            (a.speed_km_s, a.glon_deg, a.glat_deg),
            (369.82, 264.021, 48.253)
        );
    }

    /// The paper's speed and its dipole amplitude agree: c ΔT/T0 with ΔT = 3362.08 ± 0.99 μK
    /// (Planck Collaboration I 2020, Table 2) and T0 = 2.7255 K (Fixsen 2009, ApJ 707, 916;
    /// from memory) is 369.81 km/s, within the quoted ± 0.11 km/s of 369.82 (β is first
    /// order in ΔT/T0).
    #[test]
    fn planck2018_speed_matches_its_dipole_amplitude() {
        let from_amplitude = C_KM_S * 3362.08e-6 / 2.7255;
        let a = default_apex("cmb");
        assert!(
            (a.speed_km_s - from_amplitude).abs() < 0.11 + C_KM_S * 0.99e-6 / 2.7255,
            "{from_amplitude}"
        );
    }

    /// Solar motion: speed of (11.1, 12.24, 7.25) km/s is 18.04 km/s (arithmetic on the
    /// Schönrich et al. 2010 components).
    #[test]
    fn lsr_apex_from_uvw() {
        let a = default_apex("lsr");
        assert!((a.speed_km_s - 18.044).abs() < 1e-3);
        assert!(a.glat_deg > 0.0 && a.glon_deg > 0.0 && a.glon_deg < 90.0);
    }

    /// One built-in apex per frame, except the CMB, whose three are dipole measurements.
    #[test]
    fn one_default_per_frame() {
        let t = apex_table();
        for f in OBSERVER_FRAMES {
            let n = t.iter().filter(|a| a.frame == f).count();
            assert_eq!(n, if f == "cmb" { 3 } else { 1 }, "{f}");
        }
        assert!(find_apex("local-group", "yahil1977")
            .unwrap_err()
            .contains("--apex-file"));
    }

    /// Bad numbers are refused with the quantity named.
    #[test]
    fn bad_apex_numbers_are_refused() {
        assert!(Apex::from_speed_direction("x", "cmb", -1.0, 0.0, 0.0, "").is_err());
        assert!(Apex::from_speed_direction("x", "cmb", 3.0e5, 0.0, 0.0, "").is_err());
        assert!(Apex::from_speed_direction("x", "cmb", 300.0, 0.0, 91.0, "").is_err());
        assert!(Apex::from_velocity("x", "cmb", [0.0; 3], "").is_err());
        assert!(Apex::from_velocity("x", "cmb", [f64::NAN, 0.0, 1.0], "").is_err());
    }
}
