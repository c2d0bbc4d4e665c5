//! Which conventions made a catalogue's own derived columns: each column is recomputed from
//! the catalogue's inputs under every candidate convention flowsift knows, the residuals
//! compared, and the rows that no candidate reproduces named. Pure: plain columns in,
//! plain results out; the run reads and writes the files.
//!
//! - [`quantity`]: what a derived column holds, found by name or UCD, and its natural unit.
//! - [`candidates`]: the recomputations (boosts, apices, estimators, conventions, units).
//! - [`apex_fit`]: the apex fitted to a frame-changed column, with errors.
//! - [`matching`]: residuals, the best candidate, and the rows none reproduces.
//!
//! A match is evidence, not proof: two conventions can agree on a sample to within the
//! column's rounding, and a column made by a convention not in the list is described by
//! the nearest one.

pub mod apex_fit;
pub mod candidates;
pub mod matching;
pub mod quantity;

pub use apex_fit::{fit_apex, FittedApex};
pub use candidates::{candidates_for, AuditInputs, Candidate, DistanceInput};
pub use matching::{judge, CandidateScore, ColumnAudit, RowVerdict};
pub use quantity::{discover, Quantity};

/// The caution every audit prints.
pub const CAUTION: &str = "A match is evidence, not proof: conventions can agree to within a column's rounding, and a column made some other way is described by the nearest candidate.";
