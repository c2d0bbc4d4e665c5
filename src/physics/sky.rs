//! Sky frames: ICRS, FK5 (J2000) and FK4 (B1950) equatorial, Galactic and supergalactic
//! directions, the transformations between them, angular separations, supergalactic
//! Cartesian positions and sexagesimal parsing.
//!
//! A [`Direction`] is a unit vector tagged with its sky frame, so an ICRS vector cannot be
//! handed to code that expects a Galactic one. A [`Rotation`] names both ends and can be
//! inverted and composed.

use std::fmt;
use std::marker::PhantomData;

use nalgebra::{Matrix3, Vector3};

use super::constants::DEG;
use super::PhysicsError;

mod fk_systems;
mod input_frame;

pub use fk_systems::{
    fk4_e_terms_b1950, fk4_to_icrs, icrs_to_fk4, icrs_to_fk5, ABERRATION_CONSTANT_ARCSEC,
    FK5_BIAS_DALPHA0_MAS, FK5_BIAS_ETA0_MAS, FK5_BIAS_XI0_MAS, JD_B1950,
};
pub use input_frame::InputSkyFrame;

/// A celestial coordinate system whose basis vectors are fixed on the sky.
pub trait SkyFrame: Copy + fmt::Debug + Default + Send + Sync + 'static {
    /// Short name used in messages and provenance.
    const NAME: &'static str;
}

/// ICRS (J2000-aligned equatorial) frame: longitude = right ascension, latitude = declination.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Icrs;
/// FK5 equatorial frame: mean equator and equinox of J2000.0 (the FK5 catalogue frame,
/// a rotation of the ICRS by the frame bias; see [`icrs_to_fk5`]).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Fk5;
/// FK4 equatorial frame: mean equator and equinox of B1950.0 with the E-terms of aberration
/// included, as catalogue places of the IAU 1976 system, for epoch B1950.0. Not a rotation of
/// the ICRS: convert with [`fk4_to_icrs`] and [`icrs_to_fk4`].
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Fk4;
/// IAU Galactic coordinates (l, b).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Galactic;
/// Supergalactic coordinates (SGL, SGB) with Cartesian axes SGX, SGY, SGZ.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Supergalactic;

impl SkyFrame for Icrs {
    const NAME: &'static str = "icrs";
}
impl SkyFrame for Fk5 {
    const NAME: &'static str = "fk5";
}
impl SkyFrame for Fk4 {
    const NAME: &'static str = "fk4";
}
impl SkyFrame for Galactic {
    const NAME: &'static str = "galactic";
}
impl SkyFrame for Supergalactic {
    const NAME: &'static str = "supergalactic";
}

/// A unit vector on the sky, in frame `F`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Direction<F: SkyFrame> {
    v: Vector3<f64>,
    frame: PhantomData<F>,
}

impl<F: SkyFrame> Direction<F> {
    /// Direction from longitude and latitude in degrees. Longitude may take any finite value;
    /// latitude must lie in [-90°, 90°].
    pub fn from_lon_lat_deg(lon: f64, lat: f64) -> Result<Self, PhysicsError> {
        if !lon.is_finite() {
            return Err(PhysicsError::NotFinite {
                quantity: "longitude",
                value: lon,
            });
        }
        if !lat.is_finite() {
            return Err(PhysicsError::NotFinite {
                quantity: "latitude",
                value: lat,
            });
        }
        if lat.abs() > 90.0 {
            return Err(PhysicsError::LatitudeOutOfRange {
                quantity: F::NAME,
                value: lat,
            });
        }
        Ok(Self::from_lon_lat_rad_unchecked(lon * DEG, lat * DEG))
    }

    fn from_lon_lat_rad_unchecked(lon: f64, lat: f64) -> Self {
        let (sl, cl) = lon.sin_cos();
        let (sb, cb) = lat.sin_cos();
        Self::from_vector_unchecked(Vector3::new(cb * cl, cb * sl, sb))
    }

    /// Wrap a vector already known to have unit length in frame `F`.
    fn from_vector_unchecked(v: Vector3<f64>) -> Self {
        Self {
            v,
            frame: PhantomData,
        }
    }

    /// Direction of any non-zero Cartesian vector given in frame `F`.
    pub fn from_cartesian(x: f64, y: f64, z: f64) -> Result<Self, PhysicsError> {
        let v = Vector3::new(x, y, z);
        let n = v.norm();
        if !(n.is_finite() && n > 0.0) {
            return Err(PhysicsError::NotPositive {
                quantity: "length of direction vector",
                value: n,
            });
        }
        Ok(Self::from_vector_unchecked(v / n))
    }

    /// Longitude in [0°, 360°) and latitude in [-90°, 90°], degrees. The latitude is
    /// atan2(z, √(x² + y²)), accurate to rounding at the poles too (asin z loses half the
    /// digits there: ~1e-8 rad at the pole itself).
    pub fn lon_lat_deg(&self) -> (f64, f64) {
        let lat = self.v.z.atan2(self.v.x.hypot(self.v.y)) / DEG;
        let mut lon = self.v.y.atan2(self.v.x) / DEG;
        if lon < 0.0 {
            lon += 360.0;
        }
        if lon >= 360.0 {
            lon -= 360.0;
        }
        (lon, lat)
    }

    /// Cartesian components of the unit vector.
    pub fn xyz(&self) -> [f64; 3] {
        [self.v.x, self.v.y, self.v.z]
    }

    /// Cosine of the angle to another direction of the same frame.
    pub fn cos_angle(&self, other: &Self) -> f64 {
        self.v.dot(&other.v).clamp(-1.0, 1.0)
    }

    /// Angular separation in degrees, accurate at all angles (atan2 of |a×b| and a·b, as
    /// recommended for small and near-antipodal separations; see e.g. Vincenty 1975 on
    /// well-conditioned forms).
    pub fn separation_deg(&self, other: &Self) -> f64 {
        let cross = self.v.cross(&other.v).norm();
        let dot = self.v.dot(&other.v);
        cross.atan2(dot) / DEG
    }

    /// Cartesian position at distance `d` along this direction (same unit as `d`).
    pub fn at_distance(&self, d: f64) -> [f64; 3] {
        [self.v.x * d, self.v.y * d, self.v.z * d]
    }
}

/// A rotation taking vectors of frame `A` to frame `B`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rotation<A: SkyFrame, B: SkyFrame> {
    m: Matrix3<f64>,
    frames: PhantomData<(A, B)>,
}

impl<A: SkyFrame, B: SkyFrame> Rotation<A, B> {
    /// A rotation whose rows are the unit vectors of `B`'s axes expressed in `A`.
    fn from_axes(x: Vector3<f64>, y: Vector3<f64>, z: Vector3<f64>) -> Self {
        Self {
            m: Matrix3::from_rows(&[x.transpose(), y.transpose(), z.transpose()]),
            frames: PhantomData,
        }
    }

    /// A rotation from its matrix (rows = `B`'s axes in `A`), known to be orthonormal.
    fn from_matrix(m: Matrix3<f64>) -> Self {
        Self {
            m,
            frames: PhantomData,
        }
    }

    /// Rotate a direction from `A` to `B`.
    pub fn apply(&self, d: &Direction<A>) -> Direction<B> {
        Direction::from_vector_unchecked(self.m * d.v)
    }

    /// Rotate a Cartesian vector (any length) from `A` to `B`.
    pub fn apply_vector(&self, v: [f64; 3]) -> [f64; 3] {
        let r = self.m * Vector3::new(v[0], v[1], v[2]);
        [r.x, r.y, r.z]
    }

    /// The rotation from `B` back to `A`.
    pub fn inverse(&self) -> Rotation<B, A> {
        Rotation {
            m: self.m.transpose(),
            frames: PhantomData,
        }
    }

    /// First this rotation, then `next`.
    pub fn then<C: SkyFrame>(&self, next: &Rotation<B, C>) -> Rotation<A, C> {
        Rotation {
            m: next.m * self.m,
            frames: PhantomData,
        }
    }

    /// The 3×3 matrix, rows = `B`'s axes in `A`.
    pub fn matrix(&self) -> [[f64; 3]; 3] {
        let m = &self.m;
        [
            [m[(0, 0)], m[(0, 1)], m[(0, 2)]],
            [m[(1, 0)], m[(1, 1)], m[(1, 2)]],
            [m[(2, 0)], m[(2, 1)], m[(2, 2)]],
        ]
    }
}

/// Right ascension of the north Galactic pole in ICRS, degrees.
/// Source: ESA (1997), The Hipparcos and Tycho Catalogues, ESA SP-1200, Vol. 1, §1.5.3,
/// which transfers the IAU (1958) Galactic system to the ICRS.
pub const NGP_RA_DEG: f64 = 192.859_48;
/// Declination of the north Galactic pole in ICRS, degrees. Source: as [`NGP_RA_DEG`].
pub const NGP_DEC_DEG: f64 = 27.128_25;
/// Galactic longitude of the north celestial pole, degrees. Source: as [`NGP_RA_DEG`].
pub const NCP_GLON_DEG: f64 = 122.931_92;

/// Galactic longitude of the supergalactic north pole, degrees.
/// Source: de Vaucouleurs et al. (1991), Third Reference Catalogue of Bright Galaxies (RC3).
pub const SG_POLE_GLON_DEG: f64 = 47.37;
/// Galactic latitude of the supergalactic north pole, degrees. Source: as [`SG_POLE_GLON_DEG`].
pub const SG_POLE_GLAT_DEG: f64 = 6.32;
/// Galactic longitude of the supergalactic origin (SGL = 0, SGB = 0), degrees, on the
/// Galactic equator. Source: as [`SG_POLE_GLON_DEG`].
pub const SG_ORIGIN_GLON_DEG: f64 = 137.37;

/// ICRS → Galactic, built from the pole and node constants above.
///
/// The Galactic axes in ICRS follow from three conditions: z points to the NGP; the NCP has
/// Galactic longitude [`NCP_GLON_DEG`]; the frame is right-handed. With z_G the NGP, the
/// ICRS pole P = (0,0,1) has Galactic coordinates (θ, δ_NGP), so
/// P = cos δ_NGP (cos θ x_G + sin θ y_G) + sin δ_NGP z_G. The component of P orthogonal to
/// z_G fixes the direction at longitude θ; x_G and y_G follow by rotating it by −θ.
pub fn icrs_to_galactic() -> Rotation<Icrs, Galactic> {
    let z_g = Direction::<Icrs>::from_lon_lat_rad_unchecked(NGP_RA_DEG * DEG, NGP_DEC_DEG * DEG).v;
    let p = Vector3::new(0.0, 0.0, 1.0);
    // Unit vector in the Galactic plane at longitude θ (towards the NCP's projection).
    let u_theta = (p - z_g * p.dot(&z_g)).normalize();
    // Unit vector at longitude θ + 90°.
    let v_theta = z_g.cross(&u_theta);
    let (s, c) = (NCP_GLON_DEG * DEG).sin_cos();
    // x_G is at longitude 0 = θ − θ: x_G = cos θ u_θ − sin θ v_θ; y_G = sin θ u_θ + cos θ v_θ.
    let x_g = u_theta * c - v_theta * s;
    let y_g = u_theta * s + v_theta * c;
    Rotation::from_axes(x_g, y_g, z_g)
}

/// Galactic → supergalactic, from the RC3 pole and origin.
pub fn galactic_to_supergalactic() -> Rotation<Galactic, Supergalactic> {
    let z_sg = Direction::<Galactic>::from_lon_lat_rad_unchecked(
        SG_POLE_GLON_DEG * DEG,
        SG_POLE_GLAT_DEG * DEG,
    )
    .v;
    let x_sg = Direction::<Galactic>::from_lon_lat_rad_unchecked(SG_ORIGIN_GLON_DEG * DEG, 0.0).v;
    // The origin lies 90° from the pole by construction (longitudes differ by 90° and the
    // origin is on the Galactic equator); re-orthogonalise against rounding.
    let x_sg = (x_sg - z_sg * x_sg.dot(&z_sg)).normalize();
    let y_sg = z_sg.cross(&x_sg);
    Rotation::from_axes(x_sg, y_sg, z_sg)
}

/// All sky rotations a run needs, built once.
#[derive(Debug, Clone, Copy)]
pub struct SkyRotations {
    pub icrs_to_galactic: Rotation<Icrs, Galactic>,
    pub galactic_to_supergalactic: Rotation<Galactic, Supergalactic>,
    pub icrs_to_supergalactic: Rotation<Icrs, Supergalactic>,
}

impl Default for SkyRotations {
    fn default() -> Self {
        let a = icrs_to_galactic();
        let b = galactic_to_supergalactic();
        Self {
            icrs_to_galactic: a,
            galactic_to_supergalactic: b,
            icrs_to_supergalactic: a.then(&b),
        }
    }
}

/// Parse right ascension: decimal degrees ("150.25") or sexagesimal hours
/// ("10:01:00.0", "10 01 00.0", "10h01m00.0s").
pub fn parse_ra_deg(text: &str) -> Result<f64, PhysicsError> {
    let t = text.trim();
    if let Some(parts) = sexagesimal_parts(t) {
        let (neg, h, m, s) = parse_sexagesimal("right ascension", text, &parts)?;
        if neg {
            return Err(unparseable(
                "right ascension",
                text,
                "sexagesimal RA cannot be negative",
            ));
        }
        if h >= 24.0 {
            return Err(unparseable(
                "right ascension",
                text,
                "hours must be below 24",
            ));
        }
        return Ok((h + m / 60.0 + s / 3600.0) * 15.0);
    }
    let v = parse_plain("right ascension", text)?;
    if !(0.0..=360.0).contains(&v) {
        return Err(unparseable(
            "right ascension",
            text,
            "degrees must lie in [0, 360]",
        ));
    }
    Ok(v)
}

/// Parse declination: decimal degrees ("-12.5") or sexagesimal degrees ("-12:30:00.0",
/// "-12 30 00", "-12d30m00s"). The sign applies to the whole value, so "-00:30:00" is −0.5°.
pub fn parse_dec_deg(text: &str) -> Result<f64, PhysicsError> {
    let t = text.trim();
    let v = if let Some(parts) = sexagesimal_parts(t) {
        let (neg, d, m, s) = parse_sexagesimal("declination", text, &parts)?;
        let v = d + m / 60.0 + s / 3600.0;
        if neg {
            -v
        } else {
            v
        }
    } else {
        parse_plain("declination", text)?
    };
    if v.abs() > 90.0 {
        return Err(PhysicsError::LatitudeOutOfRange {
            quantity: "declination",
            value: v,
        });
    }
    Ok(v)
}

fn unparseable(quantity: &'static str, text: &str, reason: &str) -> PhysicsError {
    PhysicsError::Unparseable {
        quantity,
        text: text.to_string(),
        reason: reason.to_string(),
    }
}

fn parse_plain(quantity: &'static str, text: &str) -> Result<f64, PhysicsError> {
    let v: f64 = text.trim().parse().map_err(|_| {
        unparseable(
            quantity,
            text,
            "expected decimal degrees or sexagesimal like 12:34:56.7",
        )
    })?;
    if !v.is_finite() {
        return Err(PhysicsError::NotFinite { quantity, value: v });
    }
    Ok(v)
}

/// Split "a:b:c", "a b c" or "ahbmcs"/"adbmcs" into fields; `None` when the text has no
/// sexagesimal separator (plain decimal).
fn sexagesimal_parts(t: &str) -> Option<Vec<String>> {
    let has_sep = t.contains(':')
        || t.trim().contains(char::is_whitespace)
        || t.contains(['h', 'd', 'm', '\''])
            && !t.eq_ignore_ascii_case("nan")
            && !t.to_ascii_lowercase().contains("inf");
    if !has_sep {
        return None;
    }
    let cleaned: String = t
        .chars()
        .map(|c| match c {
            ':' | 'h' | 'H' | 'd' | 'D' | 'm' | 'M' | '\'' | '"' | 's' | 'S' | '°' => ' ',
            other => other,
        })
        .collect();
    Some(cleaned.split_whitespace().map(str::to_string).collect())
}

fn parse_sexagesimal(
    quantity: &'static str,
    text: &str,
    parts: &[String],
) -> Result<(bool, f64, f64, f64), PhysicsError> {
    if parts.is_empty() || parts.len() > 3 {
        return Err(unparseable(
            quantity,
            text,
            "expected one to three fields: units:minutes:seconds",
        ));
    }
    let first = parts[0].as_str();
    let neg = first.starts_with('-');
    let first = first.trim_start_matches(['-', '+']);
    let mut fields = [0.0_f64; 3];
    for (i, p) in std::iter::once(first)
        .chain(parts[1..].iter().map(String::as_str))
        .enumerate()
    {
        if p.starts_with(['-', '+']) {
            return Err(unparseable(
                quantity,
                text,
                "only the first field may carry a sign",
            ));
        }
        let v: f64 = p
            .parse()
            .map_err(|_| unparseable(quantity, text, &format!("field '{p}' is not a number")))?;
        if !v.is_finite() || v < 0.0 {
            return Err(unparseable(
                quantity,
                text,
                &format!("field '{p}' is not a non-negative number"),
            ));
        }
        if i > 0 && v >= 60.0 {
            return Err(unparseable(
                quantity,
                text,
                "minutes and seconds must be below 60",
            ));
        }
        if i < parts.len() - 1 && v.fract() != 0.0 {
            return Err(unparseable(
                quantity,
                text,
                "only the last field may have a fractional part",
            ));
        }
        fields[i] = v;
    }
    Ok((neg, fields[0], fields[1], fields[2]))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The rotation must be orthonormal and right-handed.
    #[test]
    fn rotations_are_proper() {
        let r = SkyRotations::default();
        for m in [
            r.icrs_to_galactic.m,
            r.galactic_to_supergalactic.m,
            r.icrs_to_supergalactic.m,
        ] {
            let i = m * m.transpose();
            assert!((i - Matrix3::identity()).abs().max() < 1e-14);
            assert!((m.determinant() - 1.0).abs() < 1e-14);
        }
    }

    /// Source: ESA (1997) Hipparcos Vol. 1 §1.5.3 — the NGP maps to b = +90°, and the NCP
    /// to l = 122.93192°.
    #[test]
    fn galactic_poles() {
        let g = icrs_to_galactic();
        let ngp = Direction::<Icrs>::from_lon_lat_deg(NGP_RA_DEG, NGP_DEC_DEG).unwrap();
        let (_, b) = g.apply(&ngp).lon_lat_deg();
        assert!((b - 90.0).abs() < 1e-9);
        let ncp = Direction::<Icrs>::from_lon_lat_deg(0.0, 90.0).unwrap();
        let (l, b) = g.apply(&ncp).lon_lat_deg();
        assert!((l - NCP_GLON_DEG).abs() < 1e-9);
        assert!((b - NGP_DEC_DEG).abs() < 1e-9);
    }

    #[test]
    fn sexagesimal_signs_and_errors() {
        assert!((parse_dec_deg("-00:30:00.0").unwrap() + 0.5).abs() < 1e-12);
        assert!((parse_ra_deg("12:00:00").unwrap() - 180.0).abs() < 1e-12);
        assert!((parse_ra_deg("12h30m00s").unwrap() - 187.5).abs() < 1e-12);
        assert!(parse_ra_deg("24:00:00").is_err());
        assert!(parse_ra_deg("12:60:00").is_err());
        assert!(parse_dec_deg("+91:00:00").is_err());
        assert!(parse_dec_deg("12:-3:00").is_err());
        assert!(parse_dec_deg("abc").is_err());
        assert!(parse_dec_deg("nan").is_err());
        assert!((parse_dec_deg("-12.5").unwrap() + 12.5).abs() < 1e-15);
    }
}
