//! Sample-level stages on per-object results: group averaging, outlier flags, the bulk flow
//! with its ΛCDM expectation, and the flow-sample export. They read the columns a
//! `velocities` run writes, so they run inside that run or alone on its output.

pub mod bulk_flow_report;
mod error;
pub mod export;
pub mod fit;
pub mod groups;
pub mod growth;
pub mod lcdm;
pub mod line_of_sight;
pub mod minimum_variance;
pub mod monopole;
pub mod outliers;
pub mod sample;
pub mod sanity;
pub mod velocity_data;

pub use error::FlowError;
pub use sample::FlowSample;
