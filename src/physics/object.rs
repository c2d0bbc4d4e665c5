//! Everything flowsift derives for one object, from position, heliocentric redshift and a
//! distance. The catalogue pipeline calls this per element over columns; the `galaxy`
//! command calls it once.

use serde::Serialize;

use super::constants::C_KM_S;
use super::cosmology::{Cosmology, LengthUnit};
use super::estimators::{
    low_redshift_velocity, peculiar_velocity, watkins_feldman_error, watkins_feldman_velocity,
    Distance, DistanceKind, EstimatorOptions, Observation,
};
use super::redshift::{Cmb, Heliocentric, Redshift};
use super::restframe::{legacy_additive, Boost, BoostMethod};
use super::sky::{Direction, Icrs, SkyRotations};
use super::PhysicsError;

/// What a run shares across objects, built once.
#[derive(Debug, Clone)]
pub struct ObjectContext<'a> {
    pub cosmology: &'a Cosmology,
    pub rotations: SkyRotations,
    pub cmb: Boost<Cmb>,
    pub method: BoostMethod,
    pub options: EstimatorOptions,
    /// Unit of distances in and out.
    pub length_unit: LengthUnit,
}

/// One object's input, in catalogue units (distances in `length_unit`).
#[derive(Debug, Clone, Copy)]
pub struct ObjectInput {
    pub ra_deg: f64,
    pub dec_deg: f64,
    pub z_helio: f64,
    /// 1σ of z_helio; 0 when unknown.
    pub z_err: f64,
    pub distance: Distance,
}

/// One object's derived quantities. Distances are in the context's length unit.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct ObjectResult {
    pub glon: f64,
    pub glat: f64,
    pub sgl: f64,
    pub sgb: f64,
    pub sgx: f64,
    pub sgy: f64,
    pub sgz: f64,
    pub z_cmb: f64,
    pub z_cos: f64,
    pub z_cos_err: f64,
    pub z_pec: f64,
    pub v_pec: f64,
    pub v_pec_err: f64,
    pub eta: f64,
    pub eta_err: f64,
    pub d_c: f64,
    pub d_l: f64,
    /// Recession velocity today, H0·D_C(z_cos), km/s: the expansion part of the motion
    /// (the rate of change of the proper distance at fixed comoving coordinate, ȧ·χ), which
    /// is not a velocity through space and is not bounded by c. Hubble (1929)'s law taken
    /// exactly in FRW coordinates (e.g. Davis & Lineweaver 2004, PASA 21, 97, eq. 1; journal
    /// reference from memory).
    pub v_rec: f64,
    /// First-order error of `v_rec`: H0·dD_C/dz·σ(z_cos) = c·σ(z_cos)/E(z_cos).
    pub v_rec_err: f64,
    /// c z_cmb − H0 d (comparison only).
    pub v_pec_low_z: f64,
    /// Watkins & Feldman (2015) estimator (comparison only).
    pub v_pec_watkins_feldman: f64,
    /// Its first-order error (redshift and distance errors; no σ_*).
    pub v_pec_watkins_feldman_err: f64,
}

/// Derive everything for one object.
pub fn evaluate(
    ctx: &ObjectContext<'_>,
    input: &ObjectInput,
) -> Result<ObjectResult, PhysicsError> {
    evaluate_with(ctx, input, None)
}

/// The CMB-frame redshift of one object, by the run's boost (as [`evaluate`] finds it).
pub fn cmb_redshift_of(
    ctx: &ObjectContext<'_>,
    ra_deg: f64,
    dec_deg: f64,
    z_helio: f64,
) -> Result<f64, PhysicsError> {
    let icrs = Direction::<Icrs>::from_lon_lat_deg(ra_deg, dec_deg)?;
    let gal = ctx.rotations.icrs_to_galactic.apply(&icrs);
    let z_helio = Redshift::<Heliocentric>::new(z_helio)?;
    Ok(match ctx.method {
        BoostMethod::Exact => ctx.cmb.from_heliocentric(z_helio, &gal),
        BoostMethod::LegacyAdditive => legacy_additive(&ctx.cmb, z_helio, &gal)?,
    }
    .value())
}

/// As [`evaluate`], but with the CMB-frame redshift given (a group's mean redshift) instead
/// of derived from z_helio; z_helio still enters the `observed` and `full` conventions.
pub fn evaluate_with(
    ctx: &ObjectContext<'_>,
    input: &ObjectInput,
    z_cmb_given: Option<f64>,
) -> Result<ObjectResult, PhysicsError> {
    let icrs = Direction::<Icrs>::from_lon_lat_deg(input.ra_deg, input.dec_deg)?;
    let gal = ctx.rotations.icrs_to_galactic.apply(&icrs);
    let sg = ctx.rotations.galactic_to_supergalactic.apply(&gal);
    let (glon, glat) = gal.lon_lat_deg();
    let (sgl, sgb) = sg.lon_lat_deg();
    let z_helio = Redshift::<Heliocentric>::new(input.z_helio)?;
    if !(input.z_err.is_finite() && input.z_err >= 0.0) {
        return Err(PhysicsError::NotFinite {
            quantity: "redshift error",
            value: input.z_err,
        });
    }
    let z_cmb = match (z_cmb_given, ctx.method) {
        (Some(z), _) => Redshift::<Cmb>::new(z)?,
        (None, BoostMethod::Exact) => ctx.cmb.from_heliocentric(z_helio, &gal),
        (None, BoostMethod::LegacyAdditive) => legacy_additive(&ctx.cmb, z_helio, &gal)?,
    };
    if z_cmb.value() <= 0.0 {
        return Err(PhysicsError::NotPositive {
            quantity: "CMB-frame redshift",
            value: z_cmb.value(),
        });
    }
    let factor = ctx.length_unit.from_mpc_factor(ctx.cosmology.params());
    let mut distance = input.distance;
    if !(distance.error.is_finite() && distance.error >= 0.0) {
        return Err(PhysicsError::NotFinite {
            quantity: "distance error",
            value: distance.error,
        });
    }
    if matches!(
        distance.kind,
        DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da
    ) {
        if !(distance.value.is_finite() && distance.value > 0.0) {
            return Err(PhysicsError::NotPositive {
                quantity: "distance",
                value: distance.value,
            });
        }
        distance.value /= factor;
        distance.error /= factor;
    }
    let obs = Observation {
        z_helio,
        z_cmb,
        z_err: input.z_err,
        distance,
    };
    let pv = peculiar_velocity(ctx.cosmology, &obs, &ctx.options)?;
    let [sgx, sgy, sgz] = sg.at_distance(pv.d_c * factor);
    // σ(z_cmb): the exact boost scales 1 + z, the additive one shifts z.
    let z_cmb_err = match ctx.options.boost {
        BoostMethod::Exact => input.z_err * z_cmb.one_plus() / z_helio.one_plus(),
        BoostMethod::LegacyAdditive => input.z_err,
    };
    let measured_d = match distance.kind {
        DistanceKind::Dc => distance.value,
        _ => pv.d_l,
    };
    Ok(ObjectResult {
        glon,
        glat,
        sgl,
        sgb,
        sgx,
        sgy,
        sgz,
        z_cmb: z_cmb.value(),
        z_cos: pv.z_cos,
        z_cos_err: pv.z_cos_err,
        z_pec: pv.z_pec,
        v_pec: pv.v_pec,
        v_pec_err: pv.v_pec_err,
        eta: pv.eta,
        eta_err: pv.eta_err,
        d_c: pv.d_c * factor,
        d_l: pv.d_l * factor,
        v_rec: ctx.cosmology.params().h0 * pv.d_c,
        v_rec_err: C_KM_S * pv.z_cos_err / ctx.cosmology.efunc(pv.z_cos),
        v_pec_low_z: low_redshift_velocity(ctx.cosmology.params().h0, z_cmb, measured_d),
        v_pec_watkins_feldman: watkins_feldman_velocity(ctx.cosmology, z_cmb, pv.d_l),
        v_pec_watkins_feldman_err: watkins_feldman_error(
            ctx.cosmology,
            z_cmb,
            z_cmb_err,
            pv.d_l,
            pv.d_l_rel_err,
        ),
    })
}

/// c, re-exported for callers that convert cz columns.
pub const SPEED_OF_LIGHT_KM_S: f64 = C_KM_S;
