//! From raw choices (run file and flags, merged, flags winning) to a validated run plan:
//! cosmology built, apex chosen, columns and units resolved against the file's header.
//! Every conflict is reported at once; the pipeline takes only the plan.

pub mod columns;

pub use crate::settings::cautions;
pub use columns::{ColumnPlan, Resolved};
