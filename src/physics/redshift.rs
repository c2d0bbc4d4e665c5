//! Redshift algebra with the rest frame in the type.
//!
//! A `Redshift<Heliocentric>` cannot be passed where a `Redshift<Cmb>` is expected; the only
//! way between frames is [`crate::physics::restframe`], which needs the direction and the apex.
//! The cosmological and peculiar parts of an observed redshift are kinds of their own.
//!
//! Composition: a photon redshifted successively by independent effects has
//! 1 + z = Π (1 + z_i) (e.g. Davis & Scrimgeour 2014, MNRAS 442, 1117, eq. 1; Harrison 1974).

use std::fmt;
use std::marker::PhantomData;

use super::constants::C_KM_S;
use super::PhysicsError;

/// A reference frame (or kind) that a redshift is measured in.
pub trait RedshiftKind: Copy + fmt::Debug + Default + Send + Sync + 'static {
    /// Short name used in messages and column names.
    const NAME: &'static str;
}

macro_rules! kind {
    ($(#[$doc:meta])* $t:ident, $name:literal) => {
        $(#[$doc])*
        #[derive(Debug, Clone, Copy, Default, PartialEq)]
        pub struct $t;
        impl RedshiftKind for $t {
            const NAME: &'static str = $name;
        }
    };
}

kind!(
    /// As measured, corrected to the barycentre of the solar system.
    Heliocentric,
    "heliocentric"
);
kind!(
    /// Local standard of rest.
    Lsr,
    "lsr"
);
kind!(
    /// Galactic standard of rest (at rest with respect to the Galactic centre).
    GalacticRest,
    "galactic-rest"
);
kind!(
    /// Local Group barycentre.
    LocalGroup,
    "local-group"
);
kind!(
    /// The frame in which the CMB dipole vanishes; the frame of cosmological comoving
    /// observers.
    Cmb,
    "cmb"
);
kind!(
    /// The part of a redshift due to expansion alone, implied by a distance and a cosmology.
    Cosmological,
    "cosmological"
);
kind!(
    /// The part of a CMB-frame redshift due to the source's own motion.
    Peculiar,
    "peculiar"
);

/// A redshift `z > -1` of kind `K`.
#[derive(Clone, Copy, PartialEq, PartialOrd)]
#[repr(transparent)]
pub struct Redshift<K: RedshiftKind> {
    z: f64,
    kind: PhantomData<K>,
}

impl<K: RedshiftKind> fmt::Debug for Redshift<K> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "Redshift<{}>({})", K::NAME, self.z)
    }
}

impl<K: RedshiftKind> Redshift<K> {
    /// A redshift, checked: finite and above −1.
    pub fn new(z: f64) -> Result<Self, PhysicsError> {
        if !z.is_finite() {
            return Err(PhysicsError::NotFinite {
                quantity: "redshift",
                value: z,
            });
        }
        if z <= -1.0 {
            return Err(PhysicsError::RedshiftNotAboveMinusOne { value: z });
        }
        Ok(Self::new_unchecked(z))
    }

    /// From a velocity-like cz in km/s (the usual catalogue unit), z = cz / c.
    pub fn from_cz(cz_km_s: f64) -> Result<Self, PhysicsError> {
        Self::new(cz_km_s / C_KM_S)
    }

    /// Internal constructor for values that are valid by construction.
    pub(crate) fn new_unchecked(z: f64) -> Self {
        Self {
            z,
            kind: PhantomData,
        }
    }

    /// From 1 + z, checked.
    pub fn from_one_plus(one_plus_z: f64) -> Result<Self, PhysicsError> {
        Self::new(one_plus_z - 1.0)
    }

    /// The number z.
    pub fn value(self) -> f64 {
        self.z
    }

    /// 1 + z.
    pub fn one_plus(self) -> f64 {
        1.0 + self.z
    }
}

/// The peculiar redshift of a source whose CMB-frame redshift is `observed` and whose
/// cosmological redshift is `cosmological`: 1 + z_pec = (1 + z_cmb) / (1 + z_cos).
/// This is the exact inverse of the composition law, not the low-redshift difference.
pub fn peculiar_part(
    observed: Redshift<Cmb>,
    cosmological: Redshift<Cosmological>,
) -> Redshift<Peculiar> {
    Redshift::new_unchecked(observed.one_plus() / cosmological.one_plus() - 1.0)
}

/// The CMB-frame redshift of a source with the given cosmological and peculiar parts:
/// 1 + z_cmb = (1 + z_cos)(1 + z_pec).
pub fn compose_cmb(
    cosmological: Redshift<Cosmological>,
    peculiar: Redshift<Peculiar>,
) -> Redshift<Cmb> {
    Redshift::new_unchecked(cosmological.one_plus() * peculiar.one_plus() - 1.0)
}

/// The cosmological redshift left after removing a peculiar redshift:
/// 1 + z_cos = (1 + z_cmb) / (1 + z_pec).
pub fn remove_peculiar(
    observed: Redshift<Cmb>,
    peculiar: Redshift<Peculiar>,
) -> Redshift<Cosmological> {
    Redshift::new_unchecked(observed.one_plus() / peculiar.one_plus() - 1.0)
}

/// Compose any number of redshift factors: 1 + z = Π (1 + z_i). Untyped, for algebra tests
/// and for chaining factors of one kind.
pub fn compose(factors: &[f64]) -> f64 {
    factors.iter().map(|z| 1.0 + z).product::<f64>() - 1.0
}

/// Relativistic Doppler redshift of a radial velocity (positive = receding):
/// 1 + z = sqrt((1 + β)/(1 − β)), β = v/c (special relativity, for a purely radial motion;
/// e.g. Rybicki & Lightman 1979, Radiative Processes in Astrophysics, §4.3).
pub fn doppler_redshift(v_km_s: f64) -> Result<Redshift<Peculiar>, PhysicsError> {
    if !v_km_s.is_finite() {
        return Err(PhysicsError::NotFinite {
            quantity: "velocity",
            value: v_km_s,
        });
    }
    let beta = v_km_s / C_KM_S;
    if beta.abs() >= 1.0 {
        return Err(PhysicsError::FasterThanLight { value: v_km_s });
    }
    Ok(Redshift::new_unchecked(
        ((1.0 + beta) / (1.0 - beta)).sqrt() - 1.0,
    ))
}

/// Radial velocity (km/s) whose relativistic Doppler redshift is `z`, the inverse of
/// [`doppler_redshift`]: v = c ((1+z)² − 1)/((1+z)² + 1).
pub fn doppler_velocity(z: Redshift<Peculiar>) -> f64 {
    doppler_velocity_of(z.value())
}

/// [`doppler_velocity`] on a raw number, for columnar code.
#[inline]
pub fn doppler_velocity_of(z: f64) -> f64 {
    let s = (1.0 + z) * (1.0 + z);
    C_KM_S * (s - 1.0) / (s + 1.0)
}

/// dv/dz of [`doppler_velocity_of`] at `z`: 4c(1+z)/((1+z)² + 1)².
#[inline]
pub fn doppler_velocity_derivative(z: f64) -> f64 {
    let s = (1.0 + z) * (1.0 + z);
    4.0 * C_KM_S * (1.0 + z) / ((s + 1.0) * (s + 1.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Handbook check (special relativity): β = 0.6 gives 1 + z = sqrt(1.6/0.4) = 2.
    #[test]
    fn doppler_handbook_value() {
        let z = doppler_redshift(0.6 * C_KM_S).unwrap();
        assert!((z.value() - 1.0).abs() < 1e-15);
        assert!((doppler_velocity(z) - 0.6 * C_KM_S).abs() < 1e-9);
    }

    #[test]
    fn doppler_derivative_matches_finite_difference() {
        for z in [-0.01, 0.0, 0.003, 0.5] {
            let h = 1e-6;
            let fd = (doppler_velocity_of(z + h) - doppler_velocity_of(z - h)) / (2.0 * h);
            assert!((fd - doppler_velocity_derivative(z)).abs() / fd.abs() < 1e-8);
        }
    }

    #[test]
    fn rejects_bad_redshifts() {
        assert!(Redshift::<Cmb>::new(-1.0).is_err());
        assert!(Redshift::<Cmb>::new(f64::NAN).is_err());
        assert!(doppler_redshift(C_KM_S).is_err());
    }
}
