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

use std::marker::PhantomData;

use nalgebra::Vector3;
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::constants::C_KM_S;
use super::redshift::{Cmb, GalacticRest, Heliocentric, LocalGroup, Lsr, Redshift, RedshiftKind};
use super::sky::{Direction, Galactic};
use super::PhysicsError;

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
}

impl Apex {
    /// A user-given apex (speed km/s, Galactic l and b in degrees), checked.
    pub fn user(
        frame: &'static str,
        speed_km_s: f64,
        glon_deg: f64,
        glat_deg: f64,
    ) -> Result<Self, PhysicsError> {
        if !speed_km_s.is_finite() || speed_km_s < 0.0 {
            return Err(PhysicsError::NotPositive {
                quantity: "apex speed",
                value: speed_km_s,
            });
        }
        Direction::<Galactic>::from_lon_lat_deg(glon_deg, glat_deg)?;
        Ok(Self {
            name: "user".into(),
            frame,
            speed_km_s,
            glon_deg,
            glat_deg,
            source: "given on the command line or in the run configuration".into(),
        })
    }

    /// Velocity vector in Galactic Cartesian axes (x → l = 0, y → l = 90°, z → NGP), km/s.
    pub fn velocity_galactic(&self) -> [f64; 3] {
        let d = Direction::<Galactic>::from_lon_lat_deg(self.glon_deg, self.glat_deg)
            .expect("apex directions are validated on construction");
        d.at_distance(self.speed_km_s)
    }

    fn from_uvw(name: &str, frame: &'static str, uvw: [f64; 3], source: &str) -> Self {
        let speed = (uvw[0] * uvw[0] + uvw[1] * uvw[1] + uvw[2] * uvw[2]).sqrt();
        let d = Direction::<Galactic>::from_cartesian(uvw[0], uvw[1], uvw[2]).expect("non-zero");
        let (l, b) = d.lon_lat_deg();
        Self {
            name: name.into(),
            frame,
            speed_km_s: speed,
            glon_deg: l,
            glat_deg: b,
            source: source.into(),
        }
    }
}

/// Solar motion relative to the LSR, (U, V, W) km/s, U towards the Galactic centre, V in
/// the direction of rotation, W towards the NGP.
/// Source: Schönrich, Binney & Dehnen (2010), MNRAS 403, 1829.
pub const SOLAR_MOTION_UVW: [f64; 3] = [11.1, 12.24, 7.25];

/// Circular speed at the Sun, km/s. Source: Eilers et al. (2019), ApJ 871, 120
/// (229.0 ± 0.2 km/s, systematic 2–5%).
pub const CIRCULAR_SPEED_EILERS2019: f64 = 229.0;

/// Circular speed of the LSR, km/s: the IAU 1985 standard value.
/// Source: Kerr & Lynden-Bell (1986), MNRAS 221, 1023.
pub const CIRCULAR_SPEED_IAU1985: f64 = 220.0;

/// COBE/FIRAS dipole speed from its temperature amplitude, v = c ΔT / T0 (first order in
/// β, which is how a dipole amplitude defines a speed): Fixsen et al. (1996), ApJ 473, 576,
/// ΔT = 3.372 mK, T0 = 2.728 K.
pub const COBE_FIRAS_SPEED: f64 = C_KM_S * 3.372e-3 / 2.728;

/// Every apex flowsift knows, the first of each frame being that frame's default.
pub fn apex_table() -> Vec<Apex> {
    let cmb = |name: &str, v: f64, l: f64, b: f64, source: &str| Apex {
        name: name.into(),
        frame: Cmb::NAME,
        speed_km_s: v,
        glon_deg: l,
        glat_deg: b,
        source: source.into(),
    };
    let lg = |name: &str, v: f64, l: f64, b: f64, source: &str| Apex {
        name: name.into(),
        frame: LocalGroup::NAME,
        speed_km_s: v,
        glon_deg: l,
        glat_deg: b,
        source: source.into(),
    };
    let [u, v, w] = SOLAR_MOTION_UVW;
    vec![
        cmb(
            "planck2018",
            369.82,
            264.021,
            48.253,
            "Planck Collaboration I (2020), A&A 641, A1 (arXiv:1807.06205), Table 2: amplitude 3362.08 ± 0.99 μK, speed 369.82 ± 0.11 km/s towards l = 264.021° ± 0.011°, b = 48.253° ± 0.005° (speed and amplitude checked against published transcriptions of the table, not the paper itself)",
        ),
        cmb(
            "planck2013",
            369.0,
            263.99,
            48.26,
            "Planck Collaboration XXVII (2014), A&A 571, A27, §1: 369 ± 0.9 km/s towards l = 263.99° ± 0.14°, b = 48.26° ± 0.03° (from Kogut et al. 1993; Fixsen et al. 1996; Hinshaw et al. 2009)",
        ),
        cmb(
            "cobe-firas",
            COBE_FIRAS_SPEED,
            264.14,
            48.26,
            "Fixsen et al. (1996), ApJ 473, 576 (COBE/FIRAS): dipole 3.372 ± 0.014 mK towards l = 264.14° ± 0.30°, b = 48.26° ± 0.30° (95% CL) on T0 = 2.728 K; speed c·ΔT/T0 = 370.6 km/s",
        ),
        lg(
            "courteau-vandenbergh1999",
            306.0,
            99.0,
            -4.0,
            // The journal reference is from memory.
            "Courteau & van den Bergh (1999), AJ 118, 337: Sun relative to the Local Group barycentre, 306 ± 18 km/s towards l = 99° ± 5°, b = −4° ± 4°",
        ),
        lg(
            "yahil1977",
            308.0,
            105.0,
            -7.0,
            "Yahil, Tammann & Sandage (1977), ApJ 217, 903: 308 km/s towards l = 105°, b = −7°",
        ),
        lg(
            "diaz2014",
            299.0,
            98.4,
            -5.9,
            "Diaz et al. (2014), arXiv:1405.3662: 299 ± 15 km/s towards l = 98.4° ± 3.6°, b = −5.9° ± 3.0°",
        ),
        lg(
            "iau1976",
            300.0,
            90.0,
            0.0,
            "IAU Transactions (1976) 16B, 201 convention: 300 km/s towards l = 90°, b = 0° (c z_LG = c z + 300 sin l cos b)",
        ),
        Apex::from_uvw(
            "schoenrich2010",
            Lsr::NAME,
            SOLAR_MOTION_UVW,
            "Schönrich, Binney & Dehnen (2010), MNRAS 403, 1829 (arXiv:0912.3693): (U, V, W) = (11.1, 12.24, 7.25) km/s",
        ),
        Apex::from_uvw(
            "schoenrich2010-eilers2019",
            GalacticRest::NAME,
            [u, v + CIRCULAR_SPEED_EILERS2019, w],
            "Solar motion of Schönrich, Binney & Dehnen (2010), MNRAS 403, 1829, plus the circular speed at the Sun 229.0 km/s of Eilers et al. (2019), ApJ 871, 120",
        ),
        Apex::from_uvw(
            "schoenrich2010-iau1985",
            GalacticRest::NAME,
            [u, v + CIRCULAR_SPEED_IAU1985, w],
            "Solar motion of Schönrich, Binney & Dehnen (2010), MNRAS 403, 1829, plus the IAU circular speed 220 km/s (Kerr & Lynden-Bell 1986, MNRAS 221, 1023)",
        ),
    ]
}

/// The apex named `name` for `frame`, or an error listing the known names.
pub fn find_apex(frame: &str, name: &str) -> Result<Apex, String> {
    let table = apex_table();
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
            format!("unknown {frame} apex '{name}'; known: {}", known.join(", "))
        })
}

/// The default apex of `frame`.
pub fn default_apex(frame: &str) -> Apex {
    apex_table()
        .into_iter()
        .find(|a| a.frame == frame)
        .expect("every observer frame has a default apex")
}

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

/// The rest frame a catalogue gives its redshifts in.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum GivenFrame {
    /// Heliocentric (barycentric), as measured.
    #[default]
    Helio,
    /// Local standard of rest.
    Lsr,
    /// Galactic standard of rest.
    Gsr,
    /// Local Group barycentre.
    Lg,
    /// CMB rest frame.
    Cmb,
}

impl GivenFrame {
    pub const ALL: [GivenFrame; 5] = [
        GivenFrame::Helio,
        GivenFrame::Lsr,
        GivenFrame::Gsr,
        GivenFrame::Lg,
        GivenFrame::Cmb,
    ];

    /// Stable name, as in flags and outputs.
    pub fn name(self) -> &'static str {
        match self {
            GivenFrame::Helio => "helio",
            GivenFrame::Lsr => "lsr",
            GivenFrame::Gsr => "gsr",
            GivenFrame::Lg => "lg",
            GivenFrame::Cmb => "cmb",
        }
    }

    /// The frame a redshift column's name says, by its last word (`z_cmb`, `cz_lg`,
    /// `Vcmb`, `z_helio` …); `None` when the name says none.
    pub fn from_column_name(name: &str) -> Option<GivenFrame> {
        let lower = name.to_ascii_lowercase();
        let word = lower
            .rsplit(|c: char| !c.is_ascii_alphanumeric())
            .next()
            .unwrap_or("");
        GivenFrame::ALL
            .into_iter()
            .find(|f| {
                let n = f.name();
                word == n
                    || ((word.starts_with('z') || word.starts_with("cz") || word.starts_with('v'))
                        && word.ends_with(n)
                        && word.len() <= n.len() + 2)
            })
            .or_else(|| (word == "heliocentric" || word == "hel").then_some(GivenFrame::Helio))
    }
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

    /// Column names that say a rest frame.
    #[test]
    fn given_frame_from_column_names() {
        for (name, frame) in [
            ("z_cmb", Some(GivenFrame::Cmb)),
            ("cz_cmb", Some(GivenFrame::Cmb)),
            ("Vcmb", Some(GivenFrame::Cmb)),
            ("z_lg", Some(GivenFrame::Lg)),
            ("cz_gsr", Some(GivenFrame::Gsr)),
            ("z_lsr", Some(GivenFrame::Lsr)),
            ("z_helio", Some(GivenFrame::Helio)),
            ("z", None),
            ("redshift", None),
        ] {
            assert_eq!(GivenFrame::from_column_name(name), frame, "{name}");
        }
    }

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

    /// Solar motion: speed of (11.1, 12.24, 7.25) km/s is 18.04 km/s (arithmetic on the
    /// Schönrich et al. 2010 components).
    #[test]
    fn lsr_apex_from_uvw() {
        let a = default_apex("lsr");
        assert!((a.speed_km_s - 18.044).abs() < 1e-3);
        assert!(a.glat_deg > 0.0 && a.glon_deg > 0.0 && a.glon_deg < 90.0);
    }
}
