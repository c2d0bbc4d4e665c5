//! The committed JSON Schemas of the `growth` result, the flow-moment keys of `bulkflow`
//! (`weights`, `minimum_variance`, `monopole`) and the `.npy` covariance sidecar must match
//! the Rust types they are generated from.
//! Regenerate with: FLOWSIFT_UPDATE_SCHEMAS=1 cargo test --test growth_schemas

use std::path::PathBuf;

use flowsift::run::covariance::CovarianceSidecar;
use flowsift::run::flow_moments::FlowMomentsReport;
use flowsift::run::growth::GrowthReport;

fn check(file: &str, schema: schemars::Schema) {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("schemas")
        .join(file);
    let mut generated = serde_json::to_string_pretty(&schema).unwrap();
    generated.push('\n');
    if std::env::var_os("FLOWSIFT_UPDATE_SCHEMAS").is_some() {
        std::fs::write(&path, &generated).unwrap();
    }
    let committed = std::fs::read_to_string(&path).unwrap_or_default();
    assert!(
        committed == generated,
        "schemas/{file} is stale; regenerate with FLOWSIFT_UPDATE_SCHEMAS=1 cargo test --test growth_schemas"
    );
}

#[test]
fn growth_schema_is_current() {
    check("growth.schema.json", schemars::schema_for!(GrowthReport));
}

#[test]
fn flow_moments_schema_is_current() {
    check(
        "flow-moments.schema.json",
        schemars::schema_for!(FlowMomentsReport),
    );
}

#[test]
fn covariance_sidecar_schema_is_current() {
    check(
        "covariance-sidecar.schema.json",
        schemars::schema_for!(CovarianceSidecar),
    );
}
