//! Per-row status: every input row is in the output, with `ok` or the reason it has no
//! velocity.

use crate::physics::PhysicsError;

/// The largest redshift a catalogue row may hold: last scattering is at z ≈ 1090 (Planck
/// 2018 results VI, Table 2, from memory), so no galaxy, supernova or cluster lies beyond.
/// A larger value is a typo or a mis-read column, and gets `RedshiftOutOfRange` rather
/// than a distance table stretched to reach it.
pub const Z_CEILING: f64 = 1100.0;

/// Why a row has (or has not) derived values. The names are stable (written to `status`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
#[repr(u8)]
pub enum RowStatus {
    Ok = 0,
    /// A value could not be read as a number (or a sexagesimal angle).
    UnparseableValue,
    MissingPosition,
    MissingRedshift,
    MissingDistance,
    /// Declination outside [−90°, 90°] or right ascension outside [0°, 360°].
    PositionOutOfRange,
    /// z ≤ −1, z above [`Z_CEILING`], a non-positive CMB-frame redshift, or beyond the
    /// cosmology's table.
    RedshiftOutOfRange,
    /// D_L or D_C ≤ 0.
    NonPositiveDistance,
    /// A negative or non-finite error.
    BadError,
    /// No cosmological redshift gives this distance in the chosen cosmology.
    NoCosmologicalSolution,
    /// Two cosmological redshifts, either side of the D_A maximum, both give this distance
    /// with a plausible peculiar velocity.
    TwoDistanceSolutions,
}

impl RowStatus {
    pub const ALL: [RowStatus; 11] = [
        RowStatus::Ok,
        RowStatus::UnparseableValue,
        RowStatus::MissingPosition,
        RowStatus::MissingRedshift,
        RowStatus::MissingDistance,
        RowStatus::PositionOutOfRange,
        RowStatus::RedshiftOutOfRange,
        RowStatus::NonPositiveDistance,
        RowStatus::BadError,
        RowStatus::NoCosmologicalSolution,
        RowStatus::TwoDistanceSolutions,
    ];

    /// The stable name written to the `status` column.
    pub fn name(self) -> &'static str {
        match self {
            RowStatus::Ok => "ok",
            RowStatus::UnparseableValue => "unparseable_value",
            RowStatus::MissingPosition => "missing_position",
            RowStatus::MissingRedshift => "missing_redshift",
            RowStatus::MissingDistance => "missing_distance",
            RowStatus::PositionOutOfRange => "position_out_of_range",
            RowStatus::RedshiftOutOfRange => "redshift_out_of_range",
            RowStatus::NonPositiveDistance => "non_positive_distance",
            RowStatus::BadError => "bad_error",
            RowStatus::NoCosmologicalSolution => "no_cosmological_solution",
            RowStatus::TwoDistanceSolutions => "two_distance_solutions",
        }
    }

    pub fn from_u8(v: u8) -> RowStatus {
        RowStatus::ALL[v as usize]
    }

    /// The status for a physics failure on an otherwise well-formed row.
    pub fn from_physics(e: &PhysicsError) -> RowStatus {
        match e {
            PhysicsError::RedshiftNotAboveMinusOne { .. }
            | PhysicsError::BeyondTable { .. }
            | PhysicsError::NoExpansion { .. } => RowStatus::RedshiftOutOfRange,
            PhysicsError::NotPositive { quantity, .. } if quantity.contains("redshift") => {
                RowStatus::RedshiftOutOfRange
            }
            PhysicsError::NotPositive { .. } => RowStatus::NonPositiveDistance,
            PhysicsError::LatitudeOutOfRange { .. } => RowStatus::PositionOutOfRange,
            PhysicsError::NotFinite { quantity, .. } if quantity.contains("error") => {
                RowStatus::BadError
            }
            PhysicsError::NotFinite { .. } | PhysicsError::Unparseable { .. } => {
                RowStatus::UnparseableValue
            }
            PhysicsError::DistanceOutOfReach { .. } => RowStatus::NoCosmologicalSolution,
            PhysicsError::TwoDistanceSolutions { .. } => RowStatus::TwoDistanceSolutions,
            PhysicsError::FasterThanLight { .. } | PhysicsError::InvalidCosmology(_) => {
                RowStatus::NoCosmologicalSolution
            }
        }
    }
}
