//! # flowsift
//!
//! Peculiar velocities for galaxy catalogues: heliocentric redshifts moved into the CMB
//! (or Local Group, Galactic) rest frame by exact boosts, cosmological redshifts implied by
//! redshift-independent distances under a chosen FLRW cosmology, the peculiar part separated
//! by the composition law (1 + z_obs) = (1 + z_cos)(1 + z_pec), and first-order errors.
//!
//! ## One galaxy, from heliocentric redshift and distance modulus to peculiar velocity
//!
//! ```
//! use flowsift::physics::cosmology::{Cosmology, CosmologyParams};
//! use flowsift::physics::estimators::{peculiar_velocity, Distance, DistanceKind, DlConvention, EstimatorOptions, Observation};
//! use flowsift::physics::redshift::{Heliocentric, Redshift, Cmb};
//! use flowsift::physics::restframe::{default_apex, Boost};
//! use flowsift::physics::sky::{Direction, Icrs, SkyRotations};
//!
//! // An invented galaxy: RA 150°, Dec +20°, z_helio = 0.03, μ = 35.4 ± 0.15 mag.
//! let rotations = SkyRotations::default();
//! let position = Direction::<Icrs>::from_lon_lat_deg(150.0, 20.0)?;
//! let galactic = rotations.icrs_to_galactic.apply(&position);
//!
//! // Into the CMB frame with the Planck 2018 dipole (the default apex).
//! let boost = Boost::<Cmb>::new(&default_apex("cmb"))?;
//! let z_helio = Redshift::<Heliocentric>::new(0.03)?;
//! let z_cmb = boost.from_heliocentric(z_helio, &galactic);
//!
//! // Flat ΛCDM, H0 = 70, Ω_m = 0.3 (a common-practice choice).
//! let cosmology = Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3))?;
//! let observation = Observation {
//!     z_helio,
//!     z_cmb,
//!     z_err: 0.0,
//!     distance: Distance { kind: DistanceKind::Mu, value: 35.4, error: 0.15 },
//! };
//! let options = EstimatorOptions { convention: DlConvention::Observed, sigma_star_km_s: 0.0, boost: Default::default() };
//! let pv = peculiar_velocity(&cosmology, &observation, &options)?;
//! assert!(pv.z_cos > 0.0 && pv.v_pec_err > 0.0);
//! println!("v_pec = {:.0} ± {:.0} km/s", pv.v_pec, pv.v_pec_err);
//! # Ok::<(), flowsift::physics::PhysicsError>(())
//! ```
//!
//! The type system keeps frames apart: `z_helio` above is a `Redshift<Heliocentric>`, and
//! `Observation::z_cmb` only accepts a `Redshift<Cmb>`, which only a [`physics::restframe::Boost`]
//! produces.
//!
//! ## Layout (data flow)
//! * [`physics`] — pure functions: sky frames, rest frames, redshifts, cosmology, estimators.

pub mod audit;
pub mod catalogue;
pub mod flags;
pub mod flow;
pub mod mock;
pub mod physics;
pub mod pipeline;
pub mod plan;
pub mod report;
pub mod run;
pub mod settings;
