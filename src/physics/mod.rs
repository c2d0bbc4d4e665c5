//! Pure physics: sky frames, rest frames, redshift algebra, cosmological distances and
//! peculiar-velocity estimators.
//!
//! Everything here is a function over plain numbers (wrapped in frame-tagged newtypes where a
//! mix-up would be a bug). Nothing in this module reads files, prints or exits; the catalogue
//! edges and the command line sit outside it.

pub mod chebyshev;
pub mod constants;
pub mod cosmology;
pub mod dipole_likelihood;
pub mod error;
pub mod estimators;
pub mod field;
pub mod malmquist;
pub mod object;
pub mod power;
pub mod redshift;
pub mod restframe;
pub mod sky;

pub use error::PhysicsError;
