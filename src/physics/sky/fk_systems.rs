//! The older equatorial systems: FK5 (J2000.0) and FK4 (B1950.0, with the E-terms of
//! aberration), tied to the ICRS.
//!
//! FK5 differs from the ICRS by a fixed rotation of a few tens of milliarcseconds (the frame
//! bias). FK4 is not a rotation of either: its catalogue places include the elliptic part of
//! the annual aberration (the E-terms), which moves every direction by up to 0.34″ depending
//! on where it points. A B1950 position therefore goes FK4 → (E-terms removed) → FK5 J2000 by
//! a fixed matrix → ICRS, and the way back inverts each step.
//!
//! All three steps are for objects without proper motion observed at B1950.0, the case of a
//! galaxy catalogue's B1950 positions.

use std::sync::OnceLock;

use nalgebra::{Matrix3, Vector3};

use super::{Direction, Fk4, Fk5, Icrs, Rotation};
use crate::physics::constants::DEG;

/// One milliarcsecond in radians.
const MAS: f64 = DEG / 3.6e6;
/// One arcsecond in radians.
const ARCSEC: f64 = DEG / 3600.0;

/// Offset of the FK5 pole from the ICRS pole towards α = 0°, η0 in the notation below,
/// milliarcseconds.
///
/// Source: the Hipparcos determination of the FK5 frame relative to the ICRS (Mignard &
/// Froeschlé 2000, A&A 354, 732) as quoted in Kaplan (2005), USNO Circular 179 (both
/// citations from memory). The three values are those astropy 8.0.2 uses for its FK5 frame
/// (read from its source, which cites USNO Circular 179) and are confirmed against its output
/// by tests/sky_frames_fk.rs. They are not the IERS 2003 frame bias (dα0 = −14.6 mas,
/// ξ0 = −16.617 mas, η0 = −6.819 mas), which ties the ICRS to the J2000 *dynamical* mean
/// equator and equinox rather than to the FK5 catalogue frame; the two differ by up to
/// 26 mas.
pub const FK5_BIAS_ETA0_MAS: f64 = -19.9;
/// Offset of the FK5 pole from the ICRS pole towards α = 90° (ξ0), milliarcseconds.
/// Source: as [`FK5_BIAS_ETA0_MAS`].
pub const FK5_BIAS_XI0_MAS: f64 = 9.1;
/// Offset of the FK5 equinox from the ICRS origin of right ascension (dα0),
/// milliarcseconds. Source: as [`FK5_BIAS_ETA0_MAS`].
pub const FK5_BIAS_DALPHA0_MAS: f64 = -22.9;

/// FK4 (E-terms removed), B1950.0 → FK5, J2000.0, for objects without proper motion: the
/// matrix of Murray (1989), A&A 218, 325, eq. 28 (rows; v_FK5 = M v_FK4). Values as in
/// astropy 8.0.2's source, which cites that equation; not re-read in the paper.
const B1950_TO_J2000: [[f64; 3]; 3] = [
    [
        0.999_925_679_495_687_7,
        -0.011_181_483_220_466_2,
        -0.004_859_003_815_359_2,
    ],
    [
        0.011_181_483_239_171_7,
        0.999_937_484_893_313_5,
        -0.000_027_162_594_714_2,
    ],
    [
        0.004_859_003_772_314_3,
        -0.000_027_170_293_744_0,
        0.999_988_194_602_374_2,
    ],
];

/// Rate of the FK4 system's rotation relative to FK5 (Murray 1989, eq. 29), per Julian
/// century of the observation epoch after 1950.0, in units of 1e-6; the matrix used is
/// [`B1950_TO_J2000`] + T × this. Values as in astropy 8.0.2's source.
const FK4_ROTATION_PER_CENTURY_1E6: [[f64; 3]; 3] = [
    [-0.002_645_526_2, -1.153_991_868_9, 2.111_134_619_0],
    [1.154_062_816_1, -0.012_904_299_7, 0.023_602_147_8],
    [-2.111_297_904_8, -0.005_602_444_8, 0.010_258_773_4],
];

/// Julian date of the Besselian epoch B1950.0: JD 2415020.31352 + 50 × 365.242198781
/// (Lieske 1979, A&A 73, 282, the Besselian-epoch definition used by the IAU 1976 system; from
/// memory).
pub const JD_B1950: f64 = 2_433_282.423_459_05;
/// Julian date of J2000.0 (TT).
const JD_J2000: f64 = 2_451_545.0;

/// Constant of aberration of the IAU (1976) system, arcseconds (Explanatory Supplement to the
/// Astronomical Almanac, Seidelmann 1992; from memory).
pub const ABERRATION_CONSTANT_ARCSEC: f64 = 20.495_52;

/// The E-terms of aberration at equinox B1950.0, as the vector A (radians) of the FK4
/// catalogue place: A = κ e (sin ϖ, −cos ϖ cos ε, −cos ϖ sin ε), with κ the constant of
/// aberration, e the eccentricity of the Earth's orbit, ϖ the mean longitude of perigee of
/// the solar orbit and ε the mean obliquity of the ecliptic, all at B1950.0.
///
/// Sources (all from memory, the numbers confirmed against astropy 8.0.2): the form and
/// e = 0.01673011, ϖ = 1015489.951″ at B1950 from the Explanatory Supplement to the
/// Astronomical Almanac (Seidelmann 1992, chapter 3); ε from the
/// IAU 1976 obliquity, ε = 84381.448″ − 46.8150″ T − 0.00059″ T² + 0.001813″ T³, T in Julian
/// centuries from J2000 (Lieske et al. 1977, A&A 58, 1). The result,
/// A ≈ (−1.62557, −0.31919, −0.13843) × 10⁻⁶, is the vector Standish (1982), A&A 115, 20
/// tabulates, and tests/sky_frames_fk.rs compares it with astropy 8.0.2's.
pub fn fk4_e_terms_b1950() -> [f64; 3] {
    let eccentricity = 0.016_730_11;
    let perigee = 1_015_489.951 * ARCSEC;
    let t = (JD_B1950 - JD_J2000) / 36_525.0;
    let obliquity = (84_381.448 + t * (-46.8150 + t * (-0.000_59 + t * 0.001_813))) * ARCSEC;
    let ek = ABERRATION_CONSTANT_ARCSEC * ARCSEC * eccentricity;
    let (sg, cg) = perigee.sin_cos();
    let (so, co) = obliquity.sin_cos();
    [ek * sg, -ek * cg * co, -ek * cg * so]
}

/// Passive rotations about the x, y and z axes (the R1, R2, R3 of the Explanatory
/// Supplement): the coordinates of a fixed vector in axes turned by `a`.
fn r1(a: f64) -> Matrix3<f64> {
    let (s, c) = a.sin_cos();
    Matrix3::new(1.0, 0.0, 0.0, 0.0, c, s, 0.0, -s, c)
}
fn r2(a: f64) -> Matrix3<f64> {
    let (s, c) = a.sin_cos();
    Matrix3::new(c, 0.0, -s, 0.0, 1.0, 0.0, s, 0.0, c)
}
fn r3(a: f64) -> Matrix3<f64> {
    let (s, c) = a.sin_cos();
    Matrix3::new(c, s, 0.0, -s, c, 0.0, 0.0, 0.0, 1.0)
}

/// ICRS → FK5 (J2000.0): the frame-bias rotation B = R1(−η0) R2(ξ0) R3(dα0) (the form of the
/// IERS Conventions 2003 and of USNO Circular 179; from memory) with the FK5 offsets
/// [`FK5_BIAS_ETA0_MAS`], [`FK5_BIAS_XI0_MAS`], [`FK5_BIAS_DALPHA0_MAS`].
pub fn icrs_to_fk5() -> Rotation<Icrs, Fk5> {
    let m =
        r1(-FK5_BIAS_ETA0_MAS * MAS) * r2(FK5_BIAS_XI0_MAS * MAS) * r3(FK5_BIAS_DALPHA0_MAS * MAS);
    Rotation::from_matrix(m)
}

/// FK4 (E-terms removed, B1950.0) → FK5 (J2000.0) for an observation at B1950.0: Murray's
/// matrix plus his rotation term times T = (Julian year of B1950.0 − 1950)/100 ≈ −2.1e-6
/// (a 5e-12 rad correction, kept so the matrix is the published one at that epoch).
fn fk4_no_e_terms_to_fk5() -> Matrix3<f64> {
    let julian_year_b1950 = 2000.0 + (JD_B1950 - JD_J2000) / 365.25;
    let t = (julian_year_b1950 - 1950.0) / 100.0;
    Matrix3::from_fn(|i, j| B1950_TO_J2000[i][j] + FK4_ROTATION_PER_CENTURY_1E6[i][j] * 1e-6 * t)
}

/// Everything the FK4 and FK5 conversions need, built once per process.
struct FkTies {
    icrs_to_fk5: Rotation<Icrs, Fk5>,
    /// FK4 without E-terms → ICRS, and its inverse.
    fk4_no_e_to_icrs: Matrix3<f64>,
    icrs_to_fk4_no_e: Matrix3<f64>,
    e_terms: Vector3<f64>,
}

fn ties() -> &'static FkTies {
    static TIES: OnceLock<FkTies> = OnceLock::new();
    TIES.get_or_init(|| {
        let bias = icrs_to_fk5();
        let to_icrs = bias.inverse().m * fk4_no_e_terms_to_fk5();
        // Murray's matrix is orthogonal to 5e-17 and the rotation term moves it by 5e-12;
        // the exact inverse keeps FK4 → ICRS → FK4 at rounding level.
        let from_icrs = to_icrs.try_inverse().unwrap_or_else(|| to_icrs.transpose());
        let [ax, ay, az] = fk4_e_terms_b1950();
        FkTies {
            icrs_to_fk5: bias,
            fk4_no_e_to_icrs: to_icrs,
            icrs_to_fk4_no_e: from_icrs,
            e_terms: Vector3::new(ax, ay, az),
        }
    })
}

/// The ICRS → FK5 rotation, built once (the same as [`icrs_to_fk5`]).
pub(super) fn cached_icrs_to_fk5() -> &'static Rotation<Icrs, Fk5> {
    &ties().icrs_to_fk5
}

/// FK4 (B1950.0, E-terms included, observed at B1950.0, no proper motion) → ICRS.
///
/// Steps: (1) remove the E-terms, r₀ = r − A + (A·r) r, renormalised (Explanatory
/// Supplement to the Astronomical Almanac, Seidelmann 1992, chapter 3; Standish 1982, A&A
/// 115, 20; from memory), with A from [`fk4_e_terms_b1950`]; (2) FK4 → FK5 J2000 by the matrix of
/// Murray (1989), A&A 218, 325, eqs. 28–29, at observation epoch B1950.0; (3) FK5 → ICRS by
/// the inverse frame bias ([`icrs_to_fk5`]). This is the transformation astropy 8.0.2 applies
/// for FK4(equinox B1950, obstime B1950) → ICRS; tests/sky_frames_fk.rs checks it.
pub fn fk4_to_icrs(d: Direction<Fk4>) -> Direction<Icrs> {
    let t = ties();
    let r = d.v;
    let a = t.e_terms;
    let without = (r - a + r * a.dot(&r)).normalize();
    Direction::from_vector_unchecked((t.fk4_no_e_to_icrs * without).normalize())
}

/// ICRS → FK4 (B1950.0, E-terms included, observed at B1950.0, no proper motion): the exact
/// inverse of [`fk4_to_icrs`].
///
/// The rotation steps are inverted by the inverse matrix. Adding the E-terms inverts
/// r₀ ∝ r (1 + A·r) − A: since that vector's length is λ = √(1 + |A|² − (A·r)²), the FK4
/// direction is r = (r₀ + A/λ)/|r₀ + A/λ|, with λ depending on r only through (A·r)² (a
/// 1e-12 effect). Starting from λ = 1 the fixed-point iteration converges to rounding in one
/// or two steps; it stops when r no longer changes (at most 8 steps).
pub fn icrs_to_fk4(d: Direction<Icrs>) -> Direction<Fk4> {
    let t = ties();
    let a = t.e_terms;
    let r0 = (t.icrs_to_fk4_no_e * d.v).normalize();
    let a2 = a.norm_squared();
    let mut r = (r0 + a).normalize();
    for _ in 0..8 {
        let ar = a.dot(&r);
        let lambda = (1.0 + a2 - ar * ar).sqrt();
        let next = (r0 + a / lambda).normalize();
        let done = next == r;
        r = next;
        if done {
            break;
        }
    }
    Direction::from_vector_unchecked(r)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The E-term vector has the size of e κ ≈ 0.343″ (the constants of
    /// [`fk4_e_terms_b1950`]) and the ICRS → FK4 inverse undoes FK4 → ICRS to rounding.
    #[test]
    fn e_terms_size_and_inverse() {
        let [x, y, z] = fk4_e_terms_b1950();
        let size_arcsec = (x * x + y * y + z * z).sqrt() / ARCSEC;
        assert!(
            (size_arcsec - 0.016_730_11 * 20.495_52).abs() < 1e-9,
            "{size_arcsec}"
        );
        for (lon, lat) in [(0.0, 0.0), (10.0, 89.9), (250.0, -45.0), (123.4, 1e-8)] {
            let d = Direction::<Fk4>::from_lon_lat_deg(lon, lat).unwrap();
            let back = icrs_to_fk4(fk4_to_icrs(d));
            assert!(d.separation_deg(&back) * DEG < 1e-15, "{lon} {lat}");
        }
    }

    /// The frame bias is a proper rotation and moves the ICRS origin by dα0 in right
    /// ascension (USNO Circular 179 form; the matrix's [0][1] element is sin dα0).
    #[test]
    fn frame_bias_is_the_stated_rotation() {
        let m = icrs_to_fk5().m;
        assert!((m * m.transpose() - Matrix3::identity()).abs().max() < 1e-15);
        assert!((m.determinant() - 1.0).abs() < 1e-15);
        assert!((m[(0, 1)] - (FK5_BIAS_DALPHA0_MAS * MAS).sin()).abs() < 1e-15);
    }
}
