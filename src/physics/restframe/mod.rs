//! Rest frames and the exact relativistic boosts between them.
//!
//! Each frame is defined by the Sun's velocity relative to it, its *apex* (speed and Galactic
//! direction). All conversions go through the heliocentric frame, in which catalogue
//! positions are measured.
//!
//! # Sign convention (derivation)
//! Let the Sun move with velocity **β** = **v**/c relative to frame F. A photon reaching us
//! from a source seen in direction n̂ travels along k̂ = −n̂. Lorentz-transforming its
//! four-momentum from the Sun's frame to F gives ν_F = γ ν_⊙ (1 + **β**·k̂) =
//! γ ν_⊙ (1 − **β**·n̂), where n̂ is the direction *as seen from the Sun* (the catalogue
//! direction). With 1 + z = ν_emitted / ν_received,
//!
//! ```text
//! 1 + z_F = (1 + z_⊙) / [γ (1 − β·n̂_⊙)]  =  (1 + z_⊙) γ (1 + β·n̂_F),
//! ```
//!
//! the second form using the direction n̂_F as it would be seen by an observer at rest in F
//! (the two directions differ by aberration). A source towards the apex (β·n̂ > 0) has
//! z_F > z_⊙: our motion towards it blueshifts what we see. The two forms agree exactly;
//! replacing n̂_F by n̂_⊙ in the second would make an error of order β²(1 − cos²θ) ≈ 1.5×10⁻⁶
//! in 1 + z for the CMB dipole, so the first form is the one used with catalogue positions.
//! To first order, c z_F ≈ c z_⊙ + v cos θ (1 + z_⊙); the purely additive legacy form
//! c z_F = c z_⊙ + v cos θ drops the (1 + z_⊙) factor.
//!
//! The module holds the boosts; [`apex`] the apices and the built-in defaults, [`chain`]
//! the presentation of a frame change as a chain of boosts, [`given`] the frame a catalogue
//! says its redshifts are in.

mod apex;
mod chain;
mod given;

use std::marker::PhantomData;

use nalgebra::Vector3;
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::constants::C_KM_S;
use super::redshift::{Cmb, GalacticRest, Heliocentric, LocalGroup, Lsr, Redshift, RedshiftKind};
use super::sky::{Direction, Galactic};
use super::PhysicsError;

pub use apex::{
    apex_table, cmb_dipoles, default_apex, find_apex, find_apex_in, galactic_rest_default,
    local_group_default, lsr_default, observer_frame, Apex, CIRCULAR_SPEED_EILERS2019,
    COBE_FIRAS_SPEED, OBSERVER_FRAMES, SOLAR_MOTION_UVW,
};
pub use chain::{boost_chain, chain_sum, ChainStep};
pub use given::GivenFrame;

/// How heliocentric redshifts are moved to the CMB frame.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum BoostMethod {
    /// 1 + z_cmb = (1 + z_helio) / [γ (1 − β·n̂)], exact.
    #[default]
    Exact,
    /// c z_cmb = c z_helio + v cos θ — legacy, for reproducing older catalogues only.
    LegacyAdditive,
}

impl BoostMethod {
    /// Stable name, as written in outputs.
    pub fn name(self) -> &'static str {
        match self {
            BoostMethod::Exact => "exact",
            BoostMethod::LegacyAdditive => "legacy-additive",
        }
    }
}

/// Frames defined by the Sun's velocity relative to them (everything but heliocentric).
pub trait ObserverRestFrame: RedshiftKind {}
impl ObserverRestFrame for Lsr {}
impl ObserverRestFrame for GalacticRest {}
impl ObserverRestFrame for LocalGroup {}
impl ObserverRestFrame for Cmb {}

/// The exact boost between the heliocentric frame and frame `F`, precomputed.
#[derive(Debug, Clone, Copy)]
pub struct Boost<F: ObserverRestFrame> {
    beta: Vector3<f64>,
    gamma: f64,
    frame: PhantomData<F>,
}

impl<F: ObserverRestFrame> Boost<F> {
    /// The boost for an apex (the Sun's velocity relative to `F`).
    pub fn new(apex: &Apex) -> Result<Self, PhysicsError> {
        if apex.speed_km_s >= C_KM_S {
            return Err(PhysicsError::FasterThanLight {
                value: apex.speed_km_s,
            });
        }
        let v = apex.velocity_galactic();
        let beta = Vector3::new(v[0], v[1], v[2]) / C_KM_S;
        let gamma = 1.0 / (1.0 - beta.norm_squared()).sqrt();
        Ok(Self {
            beta,
            gamma,
            frame: PhantomData,
        })
    }

    /// (1 + z_F)/(1 + z_⊙) for a source seen from the Sun in direction `n`:
    /// 1 / [γ (1 − β·n̂)].
    #[inline]
    pub fn factor(&self, n: &Direction<Galactic>) -> f64 {
        let [x, y, z] = n.xyz();
        let bn = self.beta.x * x + self.beta.y * y + self.beta.z * z;
        1.0 / (self.gamma * (1.0 - bn))
    }

    /// Heliocentric → `F`.
    pub fn from_heliocentric(
        &self,
        z: Redshift<Heliocentric>,
        n: &Direction<Galactic>,
    ) -> Redshift<F> {
        Redshift::new_unchecked(z.one_plus() * self.factor(n) - 1.0)
    }

    /// `F` → heliocentric, the exact inverse of [`Boost::from_heliocentric`].
    pub fn to_heliocentric(
        &self,
        z: Redshift<F>,
        n: &Direction<Galactic>,
    ) -> Redshift<Heliocentric> {
        Redshift::new_unchecked(z.one_plus() / self.factor(n) - 1.0)
    }

    /// cos θ between the apex and `n`.
    pub fn cos_angle(&self, n: &Direction<Galactic>) -> f64 {
        let [x, y, z] = n.xyz();
        (self.beta.x * x + self.beta.y * y + self.beta.z * z)
            / self.beta.norm().max(f64::MIN_POSITIVE)
    }

    /// Speed of the Sun relative to `F`, km/s.
    pub fn speed_km_s(&self) -> f64 {
        self.beta.norm() * C_KM_S
    }
}

/// From frame `A` to frame `B`, both given by their apices, exactly (through the Sun's frame).
pub fn between<A: ObserverRestFrame, B: ObserverRestFrame>(
    z: Redshift<A>,
    n: &Direction<Galactic>,
    from: &Boost<A>,
    to: &Boost<B>,
) -> Redshift<B> {
    to.from_heliocentric(from.to_heliocentric(z, n), n)
}

/// The observer boosts of a run, one per frame a catalogue may give redshifts in.
#[derive(Debug, Clone, Copy)]
pub struct ObserverBoosts<'a> {
    pub lsr: &'a Boost<Lsr>,
    pub galactic_rest: &'a Boost<GalacticRest>,
    pub local_group: &'a Boost<LocalGroup>,
    pub cmb: &'a Boost<Cmb>,
}

/// The heliocentric redshift of a source whose redshift in `frame` is `z`, seen in
/// direction `n`: the exact inverse boost of that frame's apex, 1 + z_⊙ = (1 + z_F)·γ(1 −
/// β·n̂) (special-relativistic Doppler shift of a moving observer; e.g. Rybicki & Lightman
/// 1979, "Radiative Processes in Astrophysics", §4.8 — reference from memory). Also the
/// factor (1 + z_⊙)/(1 + z_F), which carries a redshift error across.
pub fn heliocentric_of(
    frame: GivenFrame,
    z: f64,
    n: &Direction<Galactic>,
    boosts: &ObserverBoosts<'_>,
) -> Result<(Redshift<Heliocentric>, f64), PhysicsError> {
    let helio = match frame {
        GivenFrame::Helio => Redshift::<Heliocentric>::new(z)?,
        GivenFrame::Lsr => boosts.lsr.to_heliocentric(Redshift::new(z)?, n),
        GivenFrame::Gsr => boosts.galactic_rest.to_heliocentric(Redshift::new(z)?, n),
        GivenFrame::Lg => boosts.local_group.to_heliocentric(Redshift::new(z)?, n),
        GivenFrame::Cmb => boosts.cmb.to_heliocentric(Redshift::new(z)?, n),
    };
    if helio.value().is_nan() || helio.value() <= -1.0 {
        return Err(PhysicsError::NotPositive {
            quantity: "1 + heliocentric redshift",
            value: helio.one_plus(),
        });
    }
    Ok((helio, helio.one_plus() / (1.0 + z)))
}

/// The legacy additive correction c z_F = c z_⊙ + v cos θ, kept only so that older
/// catalogues can be reproduced. It omits the (1 + z) factor and all O(β²) terms.
pub fn legacy_additive<F: ObserverRestFrame>(
    boost: &Boost<F>,
    z: Redshift<Heliocentric>,
    n: &Direction<Galactic>,
) -> Result<Redshift<F>, PhysicsError> {
    Redshift::new(z.value() + boost.speed_km_s() / C_KM_S * boost.cos_angle(n))
}

/// The Galactic direction of an apex.
pub fn apex_direction(apex: &Apex) -> Direction<Galactic> {
    Direction::from_lon_lat_deg(apex.glon_deg, apex.glat_deg).expect("validated")
}

#[cfg(test)]
mod tests {
    use super::*;

    /// For every frame a catalogue may give: heliocentric → frame by the forward boost, then
    /// back by [`heliocentric_of`], returns z_helio to 1e-12 (the two are exact inverses:
    /// 1 + z_F = (1 + z_⊙)/[γ(1 − β·n̂)]); the error factor is (1 + z_⊙)/(1 + z_F).
    #[test]
    fn given_frames_round_trip_to_heliocentric() {
        let lsr = Boost::<Lsr>::new(&default_apex(Lsr::NAME)).unwrap();
        let gsr = Boost::<GalacticRest>::new(&default_apex(GalacticRest::NAME)).unwrap();
        let lg = Boost::<LocalGroup>::new(&default_apex(LocalGroup::NAME)).unwrap();
        let cmb = Boost::<Cmb>::new(&default_apex(Cmb::NAME)).unwrap();
        let boosts = ObserverBoosts {
            lsr: &lsr,
            galactic_rest: &gsr,
            local_group: &lg,
            cmb: &cmb,
        };
        for (k, z) in [0.0005, 0.003, 0.02, 0.1, 1.0, 3.0].into_iter().enumerate() {
            for j in 0..12 {
                let n = Direction::<Galactic>::from_lon_lat_deg(
                    30.0 * j as f64 + 7.0 * k as f64,
                    -80.0 + 14.0 * j as f64,
                )
                .unwrap();
                let h = Redshift::<Heliocentric>::new(z).unwrap();
                let given = [
                    (GivenFrame::Helio, z),
                    (GivenFrame::Lsr, lsr.from_heliocentric(h, &n).value()),
                    (GivenFrame::Gsr, gsr.from_heliocentric(h, &n).value()),
                    (GivenFrame::Lg, lg.from_heliocentric(h, &n).value()),
                    (GivenFrame::Cmb, cmb.from_heliocentric(h, &n).value()),
                ];
                for (frame, z_f) in given {
                    let (back, factor) = heliocentric_of(frame, z_f, &n, &boosts).unwrap();
                    assert!(
                        (back.value() - z).abs() < 1e-12,
                        "{frame:?} z = {z}: {} vs {z}",
                        back.value()
                    );
                    assert!(((1.0 + z) / (1.0 + z_f) - factor).abs() < 1e-14);
                }
            }
        }
    }

    /// Towards the apex z grows; away it shrinks; the inverse returns the input.
    #[test]
    fn boost_sign_and_inverse() {
        let a = default_apex("cmb");
        let b = Boost::<Cmb>::new(&a).unwrap();
        let towards = apex_direction(&a);
        let z = Redshift::<Heliocentric>::new(0.01).unwrap();
        let zc = b.from_heliocentric(z, &towards);
        assert!(zc.value() > z.value());
        // First order: c Δz ≈ v (1 + z).
        let dv = (zc.value() - z.value()) * C_KM_S;
        assert!((dv - 369.82 * 1.01).abs() < 1.0, "{dv}");
        let back = b.to_heliocentric(zc, &towards);
        assert!((back.value() - z.value()).abs() < 1e-15);
    }
}
