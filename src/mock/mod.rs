//! Mock peculiar-velocity catalogues with known truth.
//!
//! A pure, seeded generator: given a [`MockSpec`], a cosmology, the CMB boost and a
//! luminosity-distance convention, [`generate`] returns a columnar [`MockCatalogue`] holding
//! both what a survey would report (positions, heliocentric redshifts, distance moduli and
//! their errors) and the truth behind it (cosmological redshift, peculiar velocity, CMB-frame
//! redshift, noiseless distance modulus). Nothing here reads files or prints.
//!
//! # Forward model (object i)
//!
//! 1. **Direction** n̂ uniform on the sphere outside the zone of avoidance |b| < b_ZoA:
//!    longitude φ = 2π u₁; sin b = ±[sin b_ZoA + (1 − sin b_ZoA)|w|] with w = 2u₂ − 1 and the
//!    sign of w. Uniform sin b is uniform solid angle (dΩ = d(sin b) dφ); restricting it to
//!    |sin b| ≥ sin b_ZoA is exactly the distribution a rejection loop would give, drawn in a
//!    fixed number of steps.
//! 2. **Distance**, uniform in comoving volume (volume element r² dr) between
//!    D_min = D_C(z_min) and D_max = D_C(z_max):
//!    D_C = (D_min³ + u₃ (D_max³ − D_min³))^{1/3}; the cosmological redshift z_cos is
//!    D_C inverted through the cosmology.
//! 3. **Population**: drawn with u₄ from the normalised fractions.
//! 4. **Peculiar velocity** (radial, km/s): v_pec = **B**·n̂ + σ_v g₁, with **B** the bulk
//!    flow in Galactic Cartesian axes and g₁ a standard normal; z_pec by the relativistic
//!    Doppler formula.
//! 5. **Redshifts**: 1 + z_cmb = (1 + z_cos)(1 + z_pec); z_helio,true by the exact inverse of
//!    the boost passed in (normally the Planck 2018 CMB apex); the reported
//!    z_helio = z_helio,true + z_err g₂.
//! 6. **Distance modulus**: μ_true = 5 log10(D_L / 10 pc), D_L in the chosen convention:
//!    * `observed`: D_L = (1 + z_helio,true) D_M(z_cos);
//!    * `cosmological`: D_L = (1 + z_cos) D_M(z_cos);
//!    * `full`: D_L = (1 + z_helio,true)(1 + z_cmb) D_M(z_cos)/(1 + z_cos).
//!
//!    The reported μ = μ_true + σ_μ g₃, with σ_μ = m for [`DistanceError::Magnitudes`]`(m)`
//!    (Gaussian in μ) and σ_μ = (5/ln 10) f for [`DistanceError::Fractional`]`(f)`
//!    (log-normal in distance, σ_lnD = f, since μ = (5/ln 10) ln D + const).
//! 7. **Position**: (RA, Dec) in ICRS from n̂ by the inverse of the ICRS → Galactic rotation.
//!
//! # Reproducibility
//! Object i draws only from its own stream, `ChaCha8Rng::seed_from_u64(seed)` with
//! `set_stream(i)`, in the fixed order u₁, u₂, u₃, u₄, g₁, g₂, g₃. The catalogue therefore
//! depends on the seed alone, not on the rayon thread count or scheduling. All draws are made
//! even when the corresponding error is zero, so switching an error on or off leaves the
//! truth columns (and every other object's draws) unchanged. Changing this order changes
//! every mock for a given seed.

pub mod correlated;
pub mod random_field;
pub mod table;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use thiserror::Error;

use crate::physics::constants::{C_KM_S, DEG};
use crate::physics::cosmology::{distance_modulus_of, Cosmology};
use crate::physics::estimators::DlConvention;
use crate::physics::redshift::{compose_cmb, doppler_redshift, Cmb, Cosmological, Redshift};
use crate::physics::restframe::Boost;
use crate::physics::sky::{Direction, Galactic, SkyRotations};
use crate::physics::PhysicsError;

/// 5 / ln 10: dμ/d ln D.
const MAG_PER_LN_DISTANCE: f64 = 5.0 / std::f64::consts::LN_10;

/// How a population's distance indicator scatters.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum DistanceError {
    /// Log-normal in distance with σ_lnD = f (so σ_μ = 5/ln 10 · f); e.g. 0.20 for a
    /// Tully–Fisher-like sample.
    Fractional(f64),
    /// Gaussian in the distance modulus with this σ_μ in mag; e.g. 0.15 for an SN Ia-like
    /// sample.
    Magnitudes(f64),
}

impl DistanceError {
    /// The 1σ scatter in distance modulus, mag.
    pub fn sigma_mu(self) -> f64 {
        match self {
            DistanceError::Fractional(f) => MAG_PER_LN_DISTANCE * f,
            DistanceError::Magnitudes(m) => m,
        }
    }

    fn value(self) -> f64 {
        match self {
            DistanceError::Fractional(v) | DistanceError::Magnitudes(v) => v,
        }
    }
}

/// One kind of distance indicator in the mock survey.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Population {
    /// Label written to the catalogue's `population` column.
    pub name: String,
    /// Relative weight; the fractions of all populations are normalised to sum to one.
    pub fraction: f64,
    /// Scatter of the distance indicator.
    pub distance_error: DistanceError,
}

/// Everything that defines a mock catalogue (together with the cosmology, the CMB boost and
/// the luminosity-distance convention passed to [`generate`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct MockSpec {
    /// Free-form label of the mock survey.
    #[serde(default)]
    pub name: String,
    /// Number of objects.
    pub n: usize,
    /// Seed of the per-object random streams.
    pub seed: u64,
    /// Bulk flow, km/s, in Galactic Cartesian axes (x → l = 0, y → l = 90°, z → NGP).
    pub bulk_flow: [f64; 3],
    /// 1σ of the Gaussian, isotropic, radial nonlinear velocity added to each object, km/s.
    pub sigma_v: f64,
    /// Lowest cosmological redshift (objects are uniform in comoving volume above D_C of it).
    pub z_min: f64,
    /// Highest cosmological redshift.
    pub z_max: f64,
    /// No objects with Galactic |b| below this many degrees; `None` for the whole sky.
    pub zone_of_avoidance_deg: Option<f64>,
    /// 1σ Gaussian error added to the heliocentric redshift, and reported as `z_err`.
    pub z_err: f64,
    /// The distance-indicator populations; each object is drawn into one.
    pub populations: Vec<Population>,
    /// Fraction of objects given a gross distance error (injected outliers; default 0).
    #[serde(default)]
    pub outlier_fraction: f64,
    /// Size of an injected error, mag: uniform in [low, high] with a random sign
    /// (default [2.5, 4.0]).
    #[serde(default = "default_outlier_offset")]
    pub outlier_offset_mag: [f64; 2],
}

fn default_outlier_offset() -> [f64; 2] {
    [2.5, 4.0]
}

impl MockSpec {
    /// The invented demonstration survey, the "Lantern Nearby-Sky Survey": 3000 objects,
    /// seed 20261201, a 250 km/s bulk flow towards l = 300°, b = 20°, σ_v = 250 km/s,
    /// 0.003 < z_cos < 0.1, no objects at |b| < 10°, σ_z = 5×10⁻⁵ (15 km/s), 75 %
    /// Tully–Fisher-like (20 % distances) and 25 % SN Ia-like (0.15 mag), 1.5 % of objects
    /// with a gross distance error of 2.5–4 mag (to be flagged as outliers). The survey and
    /// its flow are made up, so the truth is known exactly.
    /// The generic mock of `flowsift mock` without a scenario: 1000 objects at rest but for a
    /// random 250 km/s, 0.003 < z < 0.1, 20% log-normal distances.
    pub fn generic() -> Self {
        MockSpec {
            name: "mock".into(),
            n: 1000,
            seed: 1,
            bulk_flow: [0.0; 3],
            sigma_v: 250.0,
            z_min: 0.003,
            z_max: 0.1,
            zone_of_avoidance_deg: None,
            z_err: 0.0,
            populations: vec![Population {
                name: "generic".into(),
                fraction: 1.0,
                distance_error: DistanceError::Fractional(0.2),
            }],
            outlier_fraction: 0.0,
            outlier_offset_mag: [2.5, 4.0],
        }
    }

    /// A named scenario: `lantern` (the invented demo survey).
    pub fn scenario(name: &str) -> Result<MockSpec, String> {
        match name {
            "lantern" => Ok(MockSpec::demo_survey()),
            other => Err(format!("unknown scenario '{other}'; known: lantern")),
        }
    }

    pub fn demo_survey() -> Self {
        Self {
            name: "Lantern Nearby-Sky Survey".into(),
            n: 3000,
            seed: 20_261_201,
            bulk_flow: bulk_flow_towards(250.0, 300.0, 20.0),
            sigma_v: 250.0,
            z_min: 0.003,
            z_max: 0.1,
            zone_of_avoidance_deg: Some(10.0),
            z_err: 5e-5,
            populations: vec![
                Population {
                    name: "tully-fisher".into(),
                    fraction: 0.75,
                    distance_error: DistanceError::Fractional(0.20),
                },
                Population {
                    name: "sn-ia".into(),
                    fraction: 0.25,
                    distance_error: DistanceError::Magnitudes(0.15),
                },
            ],
            outlier_fraction: 0.015,
            outlier_offset_mag: [2.5, 4.0],
        }
    }

    /// Check the spec on its own (the cosmology's reach is checked by [`generate`]).
    pub fn validate(&self) -> Result<(), MockError> {
        let bad = |field: &str, reason: String| {
            Err(MockError::InvalidSpec {
                field: field.to_string(),
                reason,
            })
        };
        if !(0.0..=1.0).contains(&self.outlier_fraction) {
            return bad(
                "outlier_fraction",
                format!("must lie in [0, 1], got {}", self.outlier_fraction),
            );
        }
        let [lo, hi] = self.outlier_offset_mag;
        if !(lo.is_finite() && hi.is_finite() && 0.0 <= lo && lo <= hi) {
            return bad(
                "outlier_offset_mag",
                format!(
                    "must be [low, high] with 0 ≤ low ≤ high, got {:?}",
                    self.outlier_offset_mag
                ),
            );
        }
        if self.n == 0 {
            return bad("n", "must be at least 1".into());
        }
        if !(self.z_min.is_finite() && self.z_min > 0.0) {
            return bad(
                "z_min",
                format!("must be a positive number, got {}", self.z_min),
            );
        }
        if !(self.z_max.is_finite() && self.z_max > self.z_min) {
            return bad(
                "z_max",
                format!(
                    "must be a finite number above z_min = {}, got {}",
                    self.z_min, self.z_max
                ),
            );
        }
        if let Some(i) = self.bulk_flow.iter().position(|v| !v.is_finite()) {
            return bad(
                "bulk_flow",
                format!("component {i} is not finite ({})", self.bulk_flow[i]),
            );
        }
        let speed = self.bulk_flow.iter().map(|v| v * v).sum::<f64>().sqrt();
        if speed >= C_KM_S {
            return bad(
                "bulk_flow",
                format!("speed {speed} km/s is not below the speed of light"),
            );
        }
        if !(self.sigma_v.is_finite() && self.sigma_v >= 0.0) {
            return bad(
                "sigma_v",
                format!(
                    "must be a non-negative number of km/s, got {}",
                    self.sigma_v
                ),
            );
        }
        if !(self.z_err.is_finite() && self.z_err >= 0.0) {
            return bad(
                "z_err",
                format!("must be a non-negative number, got {}", self.z_err),
            );
        }
        if let Some(zone) = self.zone_of_avoidance_deg {
            if !(zone.is_finite() && (0.0..90.0).contains(&zone)) {
                return bad(
                    "zone_of_avoidance_deg",
                    format!("must lie in [0°, 90°) to leave some sky, got {zone}"),
                );
            }
        }
        if self.populations.is_empty() {
            return bad("populations", "must list at least one population".into());
        }
        for (i, p) in self.populations.iter().enumerate() {
            if p.name.trim().is_empty() {
                return bad(
                    &format!("populations[{i}].name"),
                    "must not be empty".into(),
                );
            }
            if self.populations[..i].iter().any(|q| q.name == p.name) {
                return bad(
                    &format!("populations[{i}].name"),
                    format!("'{}' is used by more than one population", p.name),
                );
            }
            if !(p.fraction.is_finite() && p.fraction > 0.0) {
                return bad(
                    &format!("populations[{i}].fraction"),
                    format!("must be a positive number, got {}", p.fraction),
                );
            }
            let e = p.distance_error.value();
            if !(e.is_finite() && e >= 0.0) {
                return bad(
                    &format!("populations[{i}].distance_error"),
                    format!("must be a non-negative number, got {e}"),
                );
            }
        }
        Ok(())
    }

    /// The populations' fractions normalised to sum to one, in order.
    pub fn normalised_fractions(&self) -> Vec<f64> {
        let total: f64 = self.populations.iter().map(|p| p.fraction).sum();
        self.populations
            .iter()
            .map(|p| p.fraction / total)
            .collect()
    }
}

/// A bulk-flow vector (Galactic Cartesian, km/s) of `speed_km_s` towards Galactic (l, b) in
/// degrees. Latitudes outside [−90°, 90°] or non-finite input give NaN components, which
/// [`MockSpec::validate`] rejects.
pub fn bulk_flow_towards(speed_km_s: f64, l_deg: f64, b_deg: f64) -> [f64; 3] {
    match Direction::<Galactic>::from_lon_lat_deg(l_deg, b_deg) {
        Ok(d) => d.at_distance(speed_km_s),
        Err(_) => [f64::NAN; 3],
    }
}

/// A mock catalogue, one entry per object in each column (all columns have length n).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MockCatalogue {
    /// Label copied from the spec.
    pub name: String,
    /// Convention in which `mu` and `true_mu` were made.
    pub convention: DlConvention,
    /// Right ascension, ICRS, degrees in [0, 360).
    pub ra: Vec<f64>,
    /// Declination, ICRS, degrees.
    pub dec: Vec<f64>,
    /// Reported heliocentric redshift (true value plus the redshift error).
    pub z_helio: Vec<f64>,
    /// 1σ error of `z_helio`.
    pub z_err: Vec<f64>,
    /// Reported distance modulus, mag.
    pub mu: Vec<f64>,
    /// 1σ error of `mu`, mag.
    pub mu_err: Vec<f64>,
    /// Name of the population each object was drawn into.
    pub population: Vec<String>,
    /// True cosmological redshift.
    pub true_z_cos: Vec<f64>,
    /// True radial peculiar velocity, km/s.
    pub true_v_pec: Vec<f64>,
    /// True CMB-frame redshift.
    pub true_z_cmb: Vec<f64>,
    /// True heliocentric redshift (before the redshift error).
    pub true_z_helio: Vec<f64>,
    /// True comoving distance, Mpc.
    pub true_d_c: Vec<f64>,
    /// Noiseless distance modulus in `convention`, mag.
    pub true_mu: Vec<f64>,
    /// Galactic unit vector of each object (x → l = 0, y → l = 90°, z → NGP).
    pub n_galactic: Vec<[f64; 3]>,
    /// Whether the object was given an injected gross distance error.
    pub true_outlier: Vec<bool>,
}

impl MockCatalogue {
    /// Number of objects.
    pub fn len(&self) -> usize {
        self.ra.len()
    }

    /// True when the catalogue has no objects (never, for a validated spec).
    pub fn is_empty(&self) -> bool {
        self.ra.is_empty()
    }
}

/// What can go wrong while making a mock.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum MockError {
    #[error("invalid mock spec: {field} {reason}")]
    InvalidSpec { field: String, reason: String },
    #[error("the cosmology cannot place objects up to z_max = {z_max}: {source}")]
    OutOfCosmology { z_max: f64, source: PhysicsError },
    #[error("mock object {index}: {source}")]
    Object { index: usize, source: PhysicsError },
}

/// One object, before the columns are assembled.
struct Row {
    ra: f64,
    dec: f64,
    z_helio: f64,
    mu: f64,
    mu_err: f64,
    population: usize,
    z_cos: f64,
    v_pec: f64,
    z_cmb: f64,
    z_helio_true: f64,
    d_c: f64,
    mu_true: f64,
    n: [f64; 3],
    outlier: bool,
}

/// Make the mock catalogue of `spec` (see the module docs for the forward model).
///
/// `cmb` is the boost between the heliocentric and CMB frames used to turn the true CMB-frame
/// redshift into a heliocentric one (normally `Boost::<Cmb>::new(&default_apex("cmb"))`);
/// `convention` fixes how the distance modulus relates to the redshifts.
pub fn generate(
    spec: &MockSpec,
    cosmology: &Cosmology,
    cmb: &Boost<Cmb>,
    convention: DlConvention,
) -> Result<MockCatalogue, MockError> {
    generate_with_field(spec, cosmology, cmb, convention, None)
}

/// A velocity field for mocks: the radial velocity (km/s) at Galactic unit vector n̂ and
/// comoving distance r (Mpc); `None` where the field is undefined (it then adds nothing).
pub type RadialField<'a> = dyn Fn([f64; 3], f64) -> Option<f64> + Sync + 'a;

/// As [`generate`], with the radial velocity of `field` at each object's true position added
/// to the bulk flow and the random motion.
pub fn generate_with_field(
    spec: &MockSpec,
    cosmology: &Cosmology,
    cmb: &Boost<Cmb>,
    convention: DlConvention,
    field: Option<&RadialField<'_>>,
) -> Result<MockCatalogue, MockError> {
    spec.validate()?;
    let reach = |e| MockError::OutOfCosmology {
        z_max: spec.z_max,
        source: e,
    };
    let d_min = cosmology.comoving_distance(spec.z_min).map_err(reach)?;
    let d_max = cosmology.comoving_distance(spec.z_max).map_err(reach)?;
    let (v_min, v_span) = (d_min.powi(3), d_max.powi(3) - d_min.powi(3));
    let sin_zone = spec.zone_of_avoidance_deg.map_or(0.0, |b| (b * DEG).sin());
    let cumulative: Vec<f64> = spec
        .normalised_fractions()
        .iter()
        .scan(0.0, |acc, f| {
            *acc += f;
            Some(*acc)
        })
        .collect();
    let sigma_mu: Vec<f64> = spec
        .populations
        .iter()
        .map(|p| p.distance_error.sigma_mu())
        .collect();
    let galactic_to_icrs = SkyRotations::default().icrs_to_galactic.inverse();
    let base = ChaCha8Rng::seed_from_u64(spec.seed);
    let bulk = spec.bulk_flow;

    let object = |i: usize| -> Result<Row, MockError> {
        let fail = |e| MockError::Object {
            index: i,
            source: e,
        };
        let mut rng = base.clone();
        rng.set_stream(i as u64);
        let u_lon: f64 = rng.random();
        let w: f64 = 2.0 * rng.random::<f64>() - 1.0;
        let u_dist: f64 = rng.random();
        let u_pop: f64 = rng.random();
        let g_v: f64 = rng.sample(StandardNormal);
        let g_z: f64 = rng.sample(StandardNormal);
        let g_mu: f64 = rng.sample(StandardNormal);
        // 8. Injected outliers: two more draws, after the seven above, so that mocks
        // without outliers are unchanged.
        let u_out: f64 = rng.random();
        let u_off: f64 = rng.random();

        // 1. Direction, uniform in solid angle outside the zone of avoidance.
        let sin_b = (sin_zone + (1.0 - sin_zone) * w.abs()).copysign(w);
        let cos_b = (1.0 - sin_b * sin_b).max(0.0).sqrt();
        let (s_l, c_l) = (std::f64::consts::TAU * u_lon).sin_cos();
        let n =
            Direction::<Galactic>::from_cartesian(cos_b * c_l, cos_b * s_l, sin_b).map_err(fail)?;
        let xyz = n.xyz();

        // 2. Distance, uniform in comoving volume.
        let d_c = (v_min + u_dist * v_span).cbrt();
        let z_cos = cosmology.z_from_comoving(d_c).map_err(fail)?;
        let d_m = cosmology.transverse_from_comoving(d_c);

        // 3. Population.
        let population = cumulative
            .iter()
            .position(|&c| u_pop < c)
            .unwrap_or(cumulative.len() - 1);

        // 4–5. Velocity and redshifts.
        let v_field = field.and_then(|f| f(xyz, d_c)).unwrap_or(0.0);
        let v_pec =
            bulk[0] * xyz[0] + bulk[1] * xyz[1] + bulk[2] * xyz[2] + v_field + spec.sigma_v * g_v;
        let z_pec = doppler_redshift(v_pec).map_err(fail)?;
        let z_cos_typed = Redshift::<Cosmological>::new(z_cos).map_err(fail)?;
        let z_cmb = compose_cmb(z_cos_typed, z_pec);
        let z_helio_true = cmb.to_heliocentric(z_cmb, &n);
        let z_helio = z_helio_true.value() + spec.z_err * g_z;

        // 6. Distance modulus.
        let d_l = match convention {
            DlConvention::Observed => z_helio_true.one_plus() * d_m,
            DlConvention::Cosmological => z_cos_typed.one_plus() * d_m,
            DlConvention::Full => {
                z_helio_true.one_plus() * z_cmb.one_plus() * d_m / z_cos_typed.one_plus()
            }
        };
        let mu_true = distance_modulus_of(d_l);
        let mu_err = sigma_mu[population];
        let outlier = u_out < spec.outlier_fraction;
        let offset = if outlier {
            let [lo, hi] = spec.outlier_offset_mag;
            let t = 2.0 * u_off - 1.0;
            (lo + (hi - lo) * t.abs()).copysign(t)
        } else {
            0.0
        };
        let mu = mu_true + mu_err * g_mu + offset;

        // 7. Position.
        let (ra, dec) = galactic_to_icrs.apply(&n).lon_lat_deg();

        Ok(Row {
            ra,
            dec,
            z_helio,
            mu,
            mu_err,
            population,
            z_cos,
            v_pec,
            z_cmb: z_cmb.value(),
            z_helio_true: z_helio_true.value(),
            d_c,
            mu_true,
            n: xyz,
            outlier,
        })
    };

    let rows = (0..spec.n)
        .into_par_iter()
        .map(object)
        .collect::<Result<Vec<Row>, MockError>>()?;

    let col = |f: fn(&Row) -> f64| rows.iter().map(f).collect::<Vec<f64>>();
    Ok(MockCatalogue {
        name: spec.name.clone(),
        convention,
        ra: col(|r| r.ra),
        dec: col(|r| r.dec),
        z_helio: col(|r| r.z_helio),
        z_err: vec![spec.z_err; rows.len()],
        mu: col(|r| r.mu),
        mu_err: col(|r| r.mu_err),
        population: rows
            .iter()
            .map(|r| spec.populations[r.population].name.clone())
            .collect(),
        true_z_cos: col(|r| r.z_cos),
        true_v_pec: col(|r| r.v_pec),
        true_z_cmb: col(|r| r.z_cmb),
        true_z_helio: col(|r| r.z_helio_true),
        true_d_c: col(|r| r.d_c),
        true_mu: col(|r| r.mu_true),
        n_galactic: rows.iter().map(|r| r.n).collect(),
        true_outlier: rows.iter().map(|r| r.outlier).collect(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// σ_μ of a fractional error: μ = (5/ln 10) ln D + const, so σ_μ = (5/ln 10) σ_lnD;
    /// for σ_lnD = 0.2 that is 1/ln 10 = log10(e).
    #[test]
    fn fractional_sigma_mu() {
        let s = DistanceError::Fractional(0.2).sigma_mu();
        assert!((s - std::f64::consts::LOG10_E).abs() < 1e-15, "{s}");
        assert_eq!(DistanceError::Magnitudes(0.15).sigma_mu(), 0.15);
    }

    /// The demo flow has the stated speed and direction.
    #[test]
    fn demo_bulk_flow_direction() {
        let b = MockSpec::demo_survey().bulk_flow;
        let d = Direction::<Galactic>::from_cartesian(b[0], b[1], b[2]).unwrap();
        let (l, lat) = d.lon_lat_deg();
        let speed = (b[0] * b[0] + b[1] * b[1] + b[2] * b[2]).sqrt();
        assert!((speed - 250.0).abs() < 1e-9 && (l - 300.0).abs() < 1e-9);
        assert!((lat - 20.0).abs() < 1e-9);
        MockSpec::demo_survey().validate().unwrap();
    }
}
