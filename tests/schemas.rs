//! The committed JSON Schemas (run files, the `growth` result, the flow-moment keys of
//! `bulkflow`, the `.npy` covariance sidecar) must match the Rust types they are generated
//! from. Regenerate with: FLOWSIFT_UPDATE_SCHEMAS=1 cargo test --test schemas

use std::path::PathBuf;

use flowsift::run::covariance::CovarianceSidecar;
use flowsift::run::flow_moments::FlowMomentsReport;
use flowsift::run::growth::GrowthReport;
use flowsift::settings::{RunConfig, EXAMPLE_CONFIG};

#[test]
fn run_config_schema_is_current() {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("schemas/run-config.schema.json");
    let generated = RunConfig::json_schema();
    if std::env::var_os("FLOWSIFT_UPDATE_SCHEMAS").is_some() {
        std::fs::write(&path, &generated).unwrap();
    }
    let committed = std::fs::read_to_string(&path).unwrap_or_default();
    assert!(
        committed == generated,
        "schemas/run-config.schema.json is stale; regenerate with FLOWSIFT_UPDATE_SCHEMAS=1 cargo test --test schemas"
    );
}

/// The schema names every section of the example run file.
#[test]
fn schema_covers_example_sections() {
    let schema: serde_json::Value = serde_json::from_str(&RunConfig::json_schema()).unwrap();
    let props = schema["properties"].as_object().unwrap();
    for line in EXAMPLE_CONFIG.lines().filter(|l| l.starts_with('[')) {
        let section = line.trim_matches(['[', ']']);
        assert!(props.contains_key(section), "{section} missing from schema");
    }
}

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
        "schemas/{file} is stale; regenerate with FLOWSIFT_UPDATE_SCHEMAS=1 cargo test --test schemas"
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

#[test]
fn audit_schema_is_current() {
    check(
        "audit.schema.json",
        schemars::schema_for!(flowsift::run::audit::AuditReport),
    );
}
