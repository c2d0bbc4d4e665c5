//! The step shared by `velocities` and `correct` that turns a catalogue given in another sky
//! frame or redshift rest frame into ICRS positions and heliocentric redshifts, with the
//! notes the run's cautions carry about it.

use crate::physics::restframe::{BoostMethod, GivenFrame, ObserverBoosts};
use crate::physics::sky::{InputSkyFrame, SkyRotations};
use crate::pipeline::given_frames::{ok_values, positions_to_icrs, redshifts_to_heliocentric};
use crate::plan::Shared;

use super::RunError;

/// The columns the step changes in place (degrees, redshift) and the rows' statuses.
pub struct GivenColumns<'a> {
    pub lon: &'a mut [f64],
    pub lat: &'a mut [f64],
    pub z: &'a mut [f64],
    pub z_err: &'a mut [f64],
    pub status: &'a mut [u8],
}

/// What the catalogue's columns were given in.
#[derive(Debug, Clone, Copy)]
pub struct GivenIn<'a> {
    pub sky_frame: InputSkyFrame,
    pub z_frame: GivenFrame,
    /// The redshift column's name, for the notes.
    pub z_column: &'a str,
}

/// Positions in another sky frame become ICRS, redshifts in another rest frame heliocentric
/// (by the exact inverse boost of the run's apex), so that every later step works as for a
/// heliocentric ICRS catalogue. Returns the derived heliocentric redshifts (for a `z_helio`
/// output column) when the input's were in another frame, and the notes for the cautions.
pub fn to_icrs_and_heliocentric(
    cols: GivenColumns<'_>,
    given: GivenIn<'_>,
    shared: &Shared,
) -> Result<(Option<Vec<f64>>, Vec<String>), RunError> {
    let f = &shared.frames;
    if given.z_frame != GivenFrame::Helio && f.method == BoostMethod::LegacyAdditive {
        return Err(RunError::Failed(format!(
            "the redshift column '{}' is in the {} frame; the legacy additive correction \
             applies to heliocentric redshifts only (drop --boost legacy-additive)",
            given.z_column,
            given.z_frame.name()
        )));
    }
    let mut notes = vec![];
    positions_to_icrs(cols.lon, cols.lat, cols.status, given.sky_frame);
    if given.sky_frame != InputSkyFrame::Icrs {
        notes.push(format!(
            "Positions were given in the {} frame and turned into ICRS for the run ({}).",
            given.sky_frame.name(),
            sky_frame_source(given.sky_frame)
        ));
    }
    if given.z_frame == GivenFrame::Helio {
        return Ok((None, notes));
    }
    let boosts = ObserverBoosts {
        lsr: &f.lsr,
        galactic_rest: &f.galactic_rest,
        local_group: &f.local_group,
        cmb: &f.cmb,
    };
    let apex = match given.z_frame {
        GivenFrame::Lsr => &f.lsr_apex,
        GivenFrame::Gsr => &f.galactic_rest_apex,
        GivenFrame::Lg => &f.local_group_apex,
        _ => &f.cmb_apex,
    };
    redshifts_to_heliocentric(
        cols.lon,
        cols.lat,
        cols.z,
        cols.z_err,
        cols.status,
        given.z_frame,
        &boosts,
        &SkyRotations::default(),
    );
    notes.push(format!(
        "Redshifts were given in the {} frame ('{}'): z_helio was derived by the exact inverse \
         boost of the '{}' apex, which trusts the catalogue's own frame change to have used \
         that apex and an exact boost; if it used another apex or the additive correction, \
         z_helio and every result inherit the difference (where the catalogue also gives \
         heliocentric redshifts, `flowsift audit` says which apex and boost reproduce its \
         column).",
        given.z_frame.name(),
        given.z_column,
        apex.name
    ));
    Ok((Some(ok_values(cols.z, cols.status)), notes))
}

/// Where the conversion of a sky frame to ICRS comes from, for the note.
fn sky_frame_source(frame: InputSkyFrame) -> &'static str {
    match frame {
        InputSkyFrame::Icrs => "no conversion",
        InputSkyFrame::Fk5 => "FK5 J2000 frame bias as astropy 8.0.2 applies it",
        InputSkyFrame::Fk4 => {
            "FK4 B1950 with the E-terms of aberration removed, then Murray 1989 to FK5 J2000, \
             for objects without proper motion observed at B1950"
        }
        InputSkyFrame::Galactic => "Galactic pole and origin of the IAU 1958 system as transferred to the ICRS by ESA 1997, Hipparcos Vol. 1 §1.5.3",
        InputSkyFrame::Supergalactic => {
            "supergalactic pole and origin as in RC3, de Vaucouleurs et al. 1991, via Galactic"
        }
    }
}

/// The record's account of the frames: which the catalogue gave, which the run derived.
pub fn frames_detail(given: GivenIn<'_>) -> String {
    let positions = if given.sky_frame == InputSkyFrame::Icrs {
        "positions given in icrs".to_string()
    } else {
        format!(
            "positions given in {}, converted to icrs",
            given.sky_frame.name()
        )
    };
    let redshifts = if given.z_frame == GivenFrame::Helio {
        format!(
            "redshift '{}' given in helio; cmb derived by the exact boost",
            given.z_column
        )
    } else {
        format!(
            "redshift '{}' given in {}; helio derived by the exact inverse boost (column \
             z_helio), cmb from it by the exact boost",
            given.z_column,
            given.z_frame.name()
        )
    };
    format!("{positions}; {redshifts}")
}
