//! Physical constants used throughout.

/// Speed of light in vacuum, km/s (exact by the SI definition of the metre, CGPM 1983).
pub const C_KM_S: f64 = 299_792.458;

/// Degrees to radians.
pub const DEG: f64 = std::f64::consts::PI / 180.0;
