//! FK5 (J2000) and FK4 (B1950, E-terms) against astropy, and the one sky-frame entry point
//! the plan calls (`InputSkyFrame`).
//!
//! Source of every fixture number: astropy 8.0.2, make_fixtures.py (tests/reference/
//! sky_frames_fk.csv and sky_frames.csv; numpy 2.4.6, scipy 1.17.1, pyerfa 2.0.1.5 pinned).
//! Positions are compared as unit vectors (great-circle separation), which stays well
//! conditioned at the poles where the longitude is not.

mod common;

use common::fixture;
use flowsift::physics::sky::{
    fk4_e_terms_b1950, fk4_to_icrs, icrs_to_fk4, icrs_to_fk5, Direction, Fk4, Fk5, Galactic, Icrs,
    InputSkyFrame, SkyFrame, SkyRotations, Supergalactic,
};

const ARCSEC_PER_DEG: f64 = 3600.0;

/// Acceptance limit for FK4: 0.1″, the limit tracker issue 20 sets for B1950 positions. It is
/// well below the E-terms themselves (up to 0.34″), so leaving them out fails this check.
const FK4_LIMIT_ARCSEC: f64 = 0.1;
/// Acceptance limit for FK5: 1 mas. The frame bias is 20–30 mas, so a missing or wrong-signed
/// bias, or the IERS 2003 dynamical-frame bias in its place (26 mas away), fails this check.
const FK5_LIMIT_ARCSEC: f64 = 1e-3;
/// What the implementation actually reaches: the same published matrices and E-terms as
/// astropy, so only rounding separates the two (measured worst ≈ 3e-10″ = 1.5e-15 rad). A
/// bound some ten times looser documents it without being brittle.
const MEASURED_LIMIT_ARCSEC: f64 = 5e-9;
/// Except for astropy's *direct* FK4 → FK5 result (block fk4, fk5 columns), which differs
/// from astropy's own FK4 → ICRS → FK5 by up to 25.0 µas (the fixture's header states the
/// figure, computed by make_fixtures.py); we give the latter, so that check gets this bound.
const DIRECT_FK4_TO_FK5_LIMIT_ARCSEC: f64 = 3e-5;

/// Separation in arcseconds between two (lon, lat) pairs of the same frame `F`.
fn sep_arcsec<F: SkyFrame>(a: (f64, f64), b: (f64, f64)) -> f64 {
    let p = Direction::<F>::from_lon_lat_deg(a.0, a.1).unwrap();
    let q = Direction::<F>::from_lon_lat_deg(b.0, b.1).unwrap();
    p.separation_deg(&q) * ARCSEC_PER_DEG
}

/// Longitude difference in arcseconds of arc along the parallel, wrapped into (−180°, 180°].
fn lon_diff_arcsec(a: f64, b: f64) -> f64 {
    ((a - b + 540.0) % 360.0 - 180.0).abs() * ARCSEC_PER_DEG
}

/// Every row of sky_frames_fk.csv: the origin pair is the input given to astropy, the other
/// two pairs are astropy's results. Source: astropy 8.0.2, make_fixtures.py. Each input goes
/// to ICRS with our functions and from there to the other frames, so the blocks check in
/// turn ICRS → FK5 and ICRS → FK4 (block icrs), FK5 → ICRS and FK5 → FK4 (block fk5), and
/// FK4 → ICRS and FK4 → FK5 (block fk4).
#[test]
fn fk4_and_fk5_match_astropy() {
    let rows = fixture("sky_frames_fk.csv").records();
    assert!(rows.len() >= 300, "fixture has {} rows", rows.len());
    // Worst separation per check, arcseconds.
    let mut worst = std::collections::BTreeMap::<&str, f64>::new();
    let mut seen = [0usize; 3];
    let bias = icrs_to_fk5();
    for r in &rows {
        let icrs = (r.f("ra"), r.f("dec"));
        let fk5 = (r.f("fk5_ra"), r.f("fk5_dec"));
        let fk4 = (r.f("fk4_ra"), r.f("fk4_dec"));
        let origin = r.s("origin");
        let d: Direction<Icrs> = match origin {
            "icrs" => {
                seen[0] += 1;
                Direction::from_lon_lat_deg(icrs.0, icrs.1).unwrap()
            }
            "fk5" => {
                seen[1] += 1;
                bias.inverse()
                    .apply(&Direction::<Fk5>::from_lon_lat_deg(fk5.0, fk5.1).unwrap())
            }
            "fk4" => {
                seen[2] += 1;
                fk4_to_icrs(Direction::<Fk4>::from_lon_lat_deg(fk4.0, fk4.1).unwrap())
            }
            other => panic!("unknown origin {other}"),
        };
        let ours_icrs = d.lon_lat_deg();
        let ours_fk5 = bias.apply(&d).lon_lat_deg();
        let ours_fk4 = icrs_to_fk4(d).lon_lat_deg();
        let e_icrs = sep_arcsec::<Icrs>(ours_icrs, icrs);
        let e_fk5 = sep_arcsec::<Fk5>(ours_fk5, fk5);
        let e_fk4 = sep_arcsec::<Fk4>(ours_fk4, fk4);
        // (check, error, acceptance limit, measured bound); the input pair itself is skipped.
        let checks = match origin {
            "icrs" => [
                (
                    "ICRS -> FK5",
                    e_fk5,
                    FK5_LIMIT_ARCSEC,
                    MEASURED_LIMIT_ARCSEC,
                ),
                (
                    "ICRS -> FK4",
                    e_fk4,
                    FK4_LIMIT_ARCSEC,
                    MEASURED_LIMIT_ARCSEC,
                ),
            ],
            "fk5" => [
                (
                    "FK5 -> ICRS",
                    e_icrs,
                    FK5_LIMIT_ARCSEC,
                    MEASURED_LIMIT_ARCSEC,
                ),
                ("FK5 -> FK4", e_fk4, FK4_LIMIT_ARCSEC, MEASURED_LIMIT_ARCSEC),
            ],
            _ => [
                (
                    "FK4 -> ICRS",
                    e_icrs,
                    FK4_LIMIT_ARCSEC,
                    MEASURED_LIMIT_ARCSEC,
                ),
                (
                    "FK4 -> FK5 (astropy direct)",
                    e_fk5,
                    FK4_LIMIT_ARCSEC.min(FK5_LIMIT_ARCSEC),
                    DIRECT_FK4_TO_FK5_LIMIT_ARCSEC,
                ),
            ],
        };
        for (name, e, limit, measured) in checks {
            assert!(
                e < limit,
                "{name}, row {origin} {icrs:?}: off by {e}″ (limit {limit}″)"
            );
            assert!(
                e < measured,
                "{name}, row {origin} {icrs:?}: off by {e}″, more than the {measured}″ measured"
            );
            let w = worst.entry(name).or_insert(0.0);
            *w = w.max(e);
        }
        // Away from the poles the longitudes themselves agree, across ra = 0/360 included.
        for (ours, theirs) in [(ours_icrs, icrs), (ours_fk5, fk5), (ours_fk4, fk4)] {
            assert!((0.0..360.0).contains(&ours.0), "longitude {}", ours.0);
            if theirs.1.abs() < 89.0 {
                // Along the parallel, so the bound is the separation's.
                let dl = lon_diff_arcsec(ours.0, theirs.0) * theirs.1.to_radians().cos();
                assert!(
                    dl < DIRECT_FK4_TO_FK5_LIMIT_ARCSEC,
                    "longitude {} vs {}",
                    ours.0,
                    theirs.0
                );
            }
        }
    }
    assert!(seen.iter().all(|&n| n >= 50), "rows per block {seen:?}");
    assert_eq!(worst.len(), 6);
    for (name, w) in &worst {
        println!("worst vs astropy, {name}: {w:.3e}″");
    }
}

/// The numbers in the fixture's comment lines: astropy's effective ICRS → FK5 matrix and its
/// E-term vector at B1950. Source: astropy 8.0.2, make_fixtures.py (sky_frames_fk.csv header).
#[test]
fn frame_bias_matrix_and_e_terms_match_astropy() {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/sky_frames_fk.csv"
    );
    let text = std::fs::read_to_string(path).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let numbers = |l: &str| -> Vec<f64> {
        l.trim_start_matches('#')
            .split_whitespace()
            .filter_map(|w| w.parse().ok())
            .collect()
    };
    let at = lines
        .iter()
        .position(|l| l.contains("Effective ICRS->FK5 matrix"))
        .expect("matrix comment");
    let ours = icrs_to_fk5().matrix();
    for (i, row) in ours.iter().enumerate() {
        let theirs = numbers(lines[at + 1 + i]);
        assert_eq!(theirs.len(), 3);
        for j in 0..3 {
            assert!((row[j] - theirs[j]).abs() < 1e-15, "M[{i}][{j}]");
        }
    }
    let e_line = lines
        .iter()
        .find(|l| l.contains("E-terms vector at B1950"))
        .expect("E-terms comment");
    let theirs = numbers(e_line.split(':').nth(1).unwrap());
    let ours = fk4_e_terms_b1950();
    for j in 0..3 {
        // 1e-14 rad = 2 µas: the same formula, rounding apart.
        assert!(
            (ours[j] - theirs[j]).abs() < 1e-14,
            "A[{j}] {} vs {}",
            ours[j],
            theirs[j]
        );
    }
}

/// FK4 → ICRS → FK4 and ICRS → FK4 → ICRS return the input to 1e-9 rad (the limit stated
/// for round trips; the measured error is at rounding level, ~1e-16 rad), over the fixture's
/// FK4 positions and a grid reaching both poles and ra = 0/360.
#[test]
fn fk4_round_trips() {
    let mut points: Vec<(f64, f64)> = fixture("sky_frames_fk.csv")
        .records()
        .iter()
        .map(|r| (r.f("fk4_ra"), r.f("fk4_dec")))
        .collect();
    for i in 0..=36 {
        for j in 0..=18 {
            points.push((i as f64 * 10.0, -90.0 + j as f64 * 10.0));
        }
    }
    points.push((359.999_999_999, 89.999_999));
    let mut worst: f64 = 0.0;
    for (lon, lat) in points {
        let d4 = Direction::<Fk4>::from_lon_lat_deg(lon, lat).unwrap();
        let back4 = icrs_to_fk4(fk4_to_icrs(d4));
        let di = Direction::<Icrs>::from_lon_lat_deg(lon, lat).unwrap();
        let backi = fk4_to_icrs(icrs_to_fk4(di));
        let e = (d4.separation_deg(&back4))
            .max(di.separation_deg(&backi))
            .to_radians();
        worst = worst.max(e);
        assert!(e < 1e-9, "({lon}, {lat}): {e} rad");
    }
    assert!(worst < 1e-14, "worst round trip {worst} rad");
}

/// Galactic and supergalactic input through `InputSkyFrame::to_icrs_deg` is the inverse of
/// the existing rotations (to rounding), and lands on astropy's ICRS position within the
/// sky-frame limit of reference_checks.rs (1e-4°; our Galactic pole uses the Hipparcos ICRS
/// constants, astropy goes through FK5, ≤ 32 mas apart). Source: astropy 8.0.2,
/// make_fixtures.py (sky_frames.csv).
#[test]
fn galactic_and_supergalactic_input_agree_with_the_rotations_and_astropy() {
    let rot = SkyRotations::default();
    for r in fixture("sky_frames.csv").records() {
        let icrs = (r.f("ra"), r.f("dec"));
        let gal = (r.f("glon"), r.f("glat"));
        let sg = (r.f("sgl"), r.f("sgb"));
        let from_g = InputSkyFrame::Galactic.to_icrs_deg(gal.0, gal.1).unwrap();
        let from_s = InputSkyFrame::Supergalactic
            .to_icrs_deg(sg.0, sg.1)
            .unwrap();
        let inv_g = rot
            .icrs_to_galactic
            .inverse()
            .apply(&Direction::<Galactic>::from_lon_lat_deg(gal.0, gal.1).unwrap())
            .lon_lat_deg();
        let inv_s = rot
            .icrs_to_supergalactic
            .inverse()
            .apply(&Direction::<Supergalactic>::from_lon_lat_deg(sg.0, sg.1).unwrap())
            .lon_lat_deg();
        assert!(sep_arcsec::<Icrs>(from_g, inv_g) < 1e-9);
        assert!(sep_arcsec::<Icrs>(from_s, inv_s) < 1e-9);
        let eg = sep_arcsec::<Icrs>(from_g, icrs) / ARCSEC_PER_DEG;
        let es = sep_arcsec::<Icrs>(from_s, icrs) / ARCSEC_PER_DEG;
        assert!(eg < 1e-4 && es < 1e-4, "icrs {icrs:?}: {eg}° {es}°");
        // And the way back, through from_icrs_deg.
        let back_g = InputSkyFrame::Galactic
            .from_icrs_deg(icrs.0, icrs.1)
            .unwrap();
        assert!(sep_arcsec::<Galactic>(back_g, gal) / ARCSEC_PER_DEG < 1e-4);
    }
}

/// Every frame through the entry point: from_icrs_deg inverts to_icrs_deg, ICRS passes
/// through unchanged, and FK5/FK4 give what the direction-level functions give (which the
/// astropy checks above cover). Source for the FK rows: astropy 8.0.2, make_fixtures.py.
#[test]
fn input_sky_frame_entry_point_is_consistent() {
    for r in fixture("sky_frames_fk.csv").records() {
        let icrs = (r.f("ra"), r.f("dec"));
        for frame in InputSkyFrame::ALL {
            let (lon, lat) = frame.from_icrs_deg(icrs.0, icrs.1).unwrap();
            assert!((0.0..360.0).contains(&lon) && lat.abs() <= 90.0);
            let back = frame.to_icrs_deg(lon, lat).unwrap();
            assert!(sep_arcsec::<Icrs>(back, icrs) < 1e-9, "{frame}: {icrs:?}");
        }
        let via4 = InputSkyFrame::Fk4
            .to_icrs_deg(r.f("fk4_ra"), r.f("fk4_dec"))
            .unwrap();
        let via5 = InputSkyFrame::Fk5
            .to_icrs_deg(r.f("fk5_ra"), r.f("fk5_dec"))
            .unwrap();
        assert!(sep_arcsec::<Icrs>(via4, icrs) < FK4_LIMIT_ARCSEC);
        assert!(sep_arcsec::<Icrs>(via5, icrs) < FK5_LIMIT_ARCSEC);
        let same = InputSkyFrame::Icrs.to_icrs_deg(icrs.0, icrs.1).unwrap();
        assert!(sep_arcsec::<Icrs>(same, icrs) < 1e-9);
    }
    assert_eq!(InputSkyFrame::default(), InputSkyFrame::Icrs);
    assert_eq!(InputSkyFrame::parse(" FK4 "), Ok(InputSkyFrame::Fk4));
    assert!(InputSkyFrame::parse("equatorial").is_err());
    assert!(InputSkyFrame::Supergalactic
        .to_icrs_deg(0.0, -90.5)
        .is_err());
}
