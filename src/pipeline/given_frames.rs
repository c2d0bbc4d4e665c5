//! Positions a catalogue gives in another sky frame (FK5, FK4, Galactic, supergalactic)
//! brought to ICRS, and redshifts it gives in another rest frame (LSR, GSR, Local Group,
//! CMB) brought to heliocentric, before the derivation, so that every later step — the
//! CMB-frame redshift, the `observed` and `full` luminosity-distance conventions that need
//! z_helio — works as for a heliocentric ICRS catalogue. The boost back to the CMB frame is
//! the exact inverse of this one, so a CMB-frame input comes back unchanged to rounding.
//!
//! Both work in place on the columns, row by row in parallel; a row whose value does not
//! convert gets its status, and rows whose status is already not ok are left alone.

use rayon::prelude::*;

use crate::physics::restframe::{heliocentric_of, GivenFrame, ObserverBoosts};
use crate::physics::sky::{Direction, Icrs, InputSkyFrame, SkyRotations};

use super::status::RowStatus;

/// Replace `lon`/`lat` (degrees, in `frame`) by ICRS right ascension and declination
/// (degrees); a row whose position does not convert gets its status.
pub fn positions_to_icrs(
    lon: &mut [f64],
    lat: &mut [f64],
    status: &mut [u8],
    frame: InputSkyFrame,
) {
    if frame == InputSkyFrame::Icrs {
        return;
    }
    lon.par_iter_mut()
        .zip(lat.par_iter_mut())
        .zip(status.par_iter_mut())
        .for_each(|((a, b), st)| {
            if *st != RowStatus::Ok as u8 {
                return;
            }
            match frame.to_icrs_deg(*a, *b) {
                Ok((ra, dec)) => {
                    *a = ra;
                    *b = dec;
                }
                Err(e) => *st = RowStatus::from_physics(&e) as u8,
            }
        });
}

/// Replace `z` (given in `frame`, at ICRS positions `ra`/`dec` in degrees) and its error by
/// heliocentric values; a row whose redshift has no heliocentric value gets its status.
/// The error is scaled by the boost's factor d z_helio / d z.
#[allow(clippy::too_many_arguments)]
pub fn redshifts_to_heliocentric(
    ra: &[f64],
    dec: &[f64],
    z: &mut [f64],
    z_err: &mut [f64],
    status: &mut [u8],
    frame: GivenFrame,
    boosts: &ObserverBoosts<'_>,
    rotations: &SkyRotations,
) {
    if frame == GivenFrame::Helio {
        return;
    }
    z.par_iter_mut()
        .zip(z_err.par_iter_mut())
        .zip(status.par_iter_mut())
        .enumerate()
        .for_each(|(i, ((zi, err), st))| {
            if *st != RowStatus::Ok as u8 {
                return;
            }
            let found = Direction::<Icrs>::from_lon_lat_deg(ra[i], dec[i])
                .map(|d| rotations.icrs_to_galactic.apply(&d))
                .and_then(|gal| heliocentric_of(frame, *zi, &gal, boosts));
            match found {
                Ok((zh, factor)) => {
                    *zi = zh.value();
                    *err *= factor;
                }
                Err(e) => *st = RowStatus::from_physics(&e) as u8,
            }
        });
}

/// The heliocentric redshifts of the rows that are ok, NaN elsewhere (the `z_helio` output
/// column of a catalogue that gave another frame).
pub fn ok_values(z: &[f64], status: &[u8]) -> Vec<f64> {
    z.iter()
        .zip(status)
        .map(|(z, s)| {
            if *s == RowStatus::Ok as u8 {
                *z
            } else {
                f64::NAN
            }
        })
        .collect()
}
