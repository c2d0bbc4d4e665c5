//! One resolver for every command: flags and run file merged, settled against the record of
//! the input (when it is a flowsift output), cosmology, frames and conventions resolved,
//! columns and units resolved against the file's header, every file checked — before any
//! work, with every conflict reported at once. The run layer takes only plans.

pub mod apex_file;
pub mod audit;
pub mod columns;
pub mod common;
pub mod correct;
pub mod error;
pub mod galaxy;
pub mod in_memory;
pub mod inherit;
pub mod mock;
pub mod paths;
pub mod run_file;
pub mod stage;
pub mod velocities;

pub use audit::{plan_audit, AuditOrder, AuditPlan};
pub use columns::{ColumnPlan, Resolved};
pub use common::Shared;
pub use correct::{plan_correct, CorrectOrder, CorrectPlan};
pub use error::{ColumnError, PlanError};
pub use in_memory::{plan_velocities_in_memory, InMemoryOrder};
pub use mock::{plan_field, plan_mock, FieldOrder, FieldPlan, MockOrder, MockOverrides, MockPlan};
pub use paths::Files;
pub use run_file::{check_run_file, merge_run_file};
pub use stage::{plan_stage, StageOrder, StagePlan};
pub use velocities::{plan_velocities, sibling_json, sibling_path, VelocityOrder, VelocityPlan};
