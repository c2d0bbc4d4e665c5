//! Property tests of invariants (proptest): frame changes invert, composition is
//! associative, distance inversions return the redshift, boosts invert.

use flowsift::physics::cosmology::{Cosmology, CosmologyParams};
use flowsift::physics::redshift::{
    compose, doppler_redshift, doppler_velocity, Cmb, Heliocentric, LocalGroup, Redshift,
};
use flowsift::physics::restframe::{between, default_apex, Boost};
use flowsift::physics::sky::{Direction, Icrs, SkyRotations};
use proptest::prelude::*;

proptest! {
    #[test]
    fn sky_rotations_invert(ra in 0.0..360.0f64, dec in -89.9..89.9f64) {
        let r = SkyRotations::default();
        let d = Direction::<Icrs>::from_lon_lat_deg(ra, dec).unwrap();
        let back = r.icrs_to_supergalactic.inverse().apply(&r.icrs_to_supergalactic.apply(&d));
        prop_assert!(d.separation_deg(&back) < 1e-10);
        let via = r.galactic_to_supergalactic.apply(&r.icrs_to_galactic.apply(&d));
        prop_assert!(via.separation_deg(&r.icrs_to_supergalactic.apply(&d)) < 1e-10);
    }

    #[test]
    fn composition_is_associative(a in -0.5..3.0f64, b in -0.5..3.0f64, c in -0.5..3.0f64) {
        let left = compose(&[compose(&[a, b]), c]);
        let right = compose(&[a, compose(&[b, c])]);
        prop_assert!((left - right).abs() <= 1e-12 * (1.0 + left.abs()));
    }

    #[test]
    fn doppler_round_trip(v in -200_000.0..200_000.0f64) {
        let z = doppler_redshift(v).unwrap();
        prop_assert!((doppler_velocity(z) - v).abs() < 1e-7 * (1.0 + v.abs()));
    }

    #[test]
    fn boosts_invert_through_any_frames(ra in 0.0..360.0f64, dec in -90.0..90.0f64, z in 0.0..3.0f64) {
        let r = SkyRotations::default();
        let n = r.icrs_to_galactic.apply(&Direction::<Icrs>::from_lon_lat_deg(ra, dec).unwrap());
        let cmb = Boost::<Cmb>::new(&default_apex("cmb")).unwrap();
        let lg = Boost::<LocalGroup>::new(&default_apex("local-group")).unwrap();
        let zh = Redshift::<Heliocentric>::new(z).unwrap();
        let zc = cmb.from_heliocentric(zh, &n);
        let zl = between(zc, &n, &cmb, &lg);
        let back = lg.to_heliocentric(zl, &n);
        prop_assert!((back.value() - z).abs() < 1e-14 * (1.0 + z));
        prop_assert!((zl.value() - lg.from_heliocentric(zh, &n).value()).abs() < 1e-14 * (1.0 + z));
    }

    #[test]
    fn distance_inversion_returns_redshift(z in 0.001..3.0f64, om in 0.05..0.6f64, ode in 0.3..0.95f64, w0 in -1.3..-0.7f64, wa in -0.5..0.5f64) {
        let c = Cosmology::new(CosmologyParams { h0: 70.0, omega_m: om, omega_de: ode, omega_r: 0.0, w0, wa }).unwrap();
        if c.ensure_covers(3.1).is_ok() {
            let d = c.distances(z).unwrap();
            prop_assert!((c.z_from_comoving(d.d_c).unwrap() - z).abs() < 1e-9 * z.max(1.0));
            prop_assert!((c.z_from_luminosity(d.d_l).unwrap() - z).abs() < 1e-9 * z.max(1.0));
            if let Ok(zm) = c.z_from_transverse(d.d_m) {
                prop_assert!((zm - z).abs() < 1e-9 * z.max(1.0));
            }
        }
    }
}
