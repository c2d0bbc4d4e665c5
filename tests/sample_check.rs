//! The sample check after every `velocities` run: on the demo survey (a known flow of a few
//! hundred km/s) the median v_pec is near zero and nothing is flagged; with the distance
//! modulus read as a luminosity distance the median is thousands of km/s and the run warns,
//! naming the flag. The expectation that peculiar velocities average near zero over a
//! sample is common practice (the Hubble flow dominates; a measured bulk flow is a few
//! hundred km/s).

use assert_cmd::Command;

fn run(extra: &[&str]) -> (String, serde_json::Value) {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("survey.csv");
    std::fs::copy(
        concat!(env!("CARGO_MANIFEST_DIR"), "/demo-data/lantern_survey.csv"),
        &input,
    )
    .unwrap();
    let out = dir.path().join("out.csv");
    let run = |json: bool| {
        let mut c = Command::cargo_bin("flowsift").unwrap();
        c.args(["velocities", input.to_str().unwrap(), "-o"])
            .arg(&out)
            .args(["--force"])
            .args(extra);
        if json {
            c.arg("--json");
        }
        let done = c.output().unwrap();
        assert!(done.status.success(), "{:?}", done);
        String::from_utf8_lossy(&done.stdout).to_string()
    };
    let text = run(false);
    let json: serde_json::Value = serde_json::from_str(&run(true)).unwrap();
    (text, json)
}

#[test]
fn demo_survey_passes_and_a_misread_distance_warns() {
    let (text, json) = run(&[]);
    assert!(text.contains("sample check ("), "{text}");
    assert!(!text.contains("warning: Implausible"), "{text}");
    let c = &json["sample_check"];
    assert!(c["median_v_pec"].as_f64().unwrap().abs() < 300.0, "{c}");
    // The status counts are an object by status name, and add up to the rows read.
    let counts = json["counts"].as_object().unwrap();
    assert_eq!(counts["ok"], json["rows_ok"]);
    let total: u64 = counts.values().map(|v| v.as_u64().unwrap()).sum();
    assert_eq!(Some(total), json["rows_read"].as_u64());
    assert!(c["monopole_eta"].as_f64().unwrap().abs() < 0.01, "{c}");

    let (text, json) = run(&["--distance-column", "mu", "--distance-kind", "dl"]);
    assert!(text.contains("warning: Implausible result"), "{text}");
    assert!(text.contains("--distance-kind"), "{text}");
    let c = &json["sample_check"];
    assert!(c["median_v_pec"].as_f64().unwrap() > 3000.0, "{c}");
    assert_eq!(c["warnings"].as_array().unwrap().len(), 1);
}
