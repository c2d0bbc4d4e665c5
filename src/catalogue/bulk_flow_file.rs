//! The bulk-flow JSON file (`OUTPUT.bulkflow.json`, or `bulkflow -o FILE`): the stage's
//! [`BulkFlowReport`] with the run's [`RunRecord`] under the key `record`, written
//! atomically, and read back as its type (the report and the figures use this reader).

use std::path::Path;

use super::{write_json_atomically, CatalogueError, RunRecord};
use crate::flow::bulk_flow_report::BulkFlowReport;

/// Write `report` and its `record` to `path` as pretty-printed JSON, atomically; an existing
/// file needs `force`.
pub fn write_bulk_flow(
    path: &Path,
    report: &BulkFlowReport,
    record: &RunRecord,
    force: bool,
) -> Result<(), CatalogueError> {
    let to_json = |v: Result<serde_json::Value, serde_json::Error>| {
        v.map_err(|e| CatalogueError::write(path, e.to_string()))
    };
    let mut value = to_json(serde_json::to_value(report))?;
    if let Some(m) = value.as_object_mut() {
        m.insert("record".into(), to_json(serde_json::to_value(record))?);
    }
    write_json_atomically(path, &value, force)
}

/// Read a bulk-flow JSON file written by [`write_bulk_flow`] (its `record` is left aside);
/// errors name the file and say whether it is not JSON or not a bulk-flow result.
pub fn read_bulk_flow(path: &Path) -> Result<BulkFlowReport, CatalogueError> {
    let text =
        std::fs::read_to_string(path).map_err(|e| CatalogueError::read(path, e.to_string()))?;
    let mut value: serde_json::Value = serde_json::from_str(&text)
        .map_err(|e| CatalogueError::read(path, format!("not JSON: {e}")))?;
    earlier_layout_to_current(&mut value);
    serde_json::from_value(value).map_err(|e| {
        CatalogueError::read(
            path,
            format!("not a flowsift bulk-flow result (from `flowsift bulkflow -o` or `velocities --bulk-flow`): {e}"),
        )
    })
}

/// Results written before the Galactic flow became `galactic: {v, cov}` and the fit's
/// details `fit: {…}` had `v_galactic`, `cov`, `sigma_star`, `sigma_star_fitted`, `n_used`,
/// `fit_space` and `chi2` at the top level: move them into the current places, so that a
/// result an earlier version wrote still reads.
fn earlier_layout_to_current(value: &mut serde_json::Value) {
    let Some(map) = value.as_object_mut() else {
        return;
    };
    if map.contains_key("galactic") || !map.contains_key("v_galactic") {
        return;
    }
    let mut take = |key: &str| map.remove(key).unwrap_or(serde_json::Value::Null);
    let galactic = serde_json::json!({ "v": take("v_galactic"), "cov": take("cov") });
    let fit = serde_json::json!({
        "quantity": take("fit_space"),
        "n_used": take("n_used"),
        "sigma_star": take("sigma_star"),
        "sigma_star_fitted": take("sigma_star_fitted"),
        "chi2": take("chi2"),
    });
    map.insert("galactic".into(), galactic);
    map.insert("fit".into(), fit);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::flow::bulk_flow_report::{AxesReport, FitSummary, LcdmComparison};
    use crate::settings::FitSpace;

    fn report(amplitude_err: f64, lcdm: bool) -> BulkFlowReport {
        let cov = [
            [6400.0, 12.5, -3.0],
            [12.5, 6100.0, 7.25],
            [-3.0, 7.25, 5900.0],
        ];
        BulkFlowReport {
            galactic: AxesReport {
                v: [80.0, -230.0, 43.0],
                cov,
            },
            amplitude: 247.3,
            amplitude_err,
            l: 289.2,
            b: 10.03,
            supergalactic: AxesReport {
                v: [-200.0, 50.5, -120.25],
                cov,
            },
            equatorial: AxesReport {
                v: [1.0e-3, -2.5e5, 3.0],
                cov,
            },
            fit: FitSummary {
                quantity: FitSpace::Velocity,
                n_used: 380,
                sigma_star: 151.5,
                sigma_star_fitted: true,
                chi2: 377.125,
            },
            lcdm: lcdm.then(|| LcdmComparison {
                lcdm_rms: [110.0, 111.0, 109.0],
                lcdm_cov: cov,
                chi2: 4.2,
                dof: 3,
                probability: 0.24,
                growth_rate: 0.5126,
                sigma8: 0.8102,
                window: "pair sum".into(),
                power_spectrum: "Eisenstein & Hu (1998)".into(),
            }),
            cautions: vec!["σ_* fitted; \"quoted\" text".into()],
        }
    }

    fn record() -> RunRecord {
        RunRecord::new(
            "bulkflow",
            "flowsift bulkflow in.fits -o in.fits.bulkflow.json",
            "2026-12-02T06:30:00Z",
        )
    }

    #[test]
    fn what_is_written_reads_back_equal() {
        let dir = tempfile::tempdir().unwrap();
        for lcdm in [true, false] {
            let path = dir.path().join(format!("b{lcdm}.json"));
            let written = report(80.5, lcdm);
            write_bulk_flow(&path, &written, &record(), false).unwrap();
            assert_eq!(read_bulk_flow(&path).unwrap(), written);
            // The file is the report's own JSON with the record beside it.
            let text = std::fs::read_to_string(&path).unwrap();
            let value: serde_json::Value = serde_json::from_str(&text).unwrap();
            assert_eq!(value["fit"]["quantity"], "velocity");
            assert_eq!(value["record"]["step"], "bulkflow");
            assert_eq!(value["lcdm"].is_null(), !lcdm);
            // An existing file is kept without force.
            let again = write_bulk_flow(&path, &written, &record(), false).unwrap_err();
            assert!(again.to_string().contains("--force"), "{again}");
        }
    }

    #[test]
    fn a_number_written_as_null_reads_back_as_nan() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("b.json");
        let mut written = report(f64::NAN, true);
        written.galactic.cov[1][2] = f64::INFINITY;
        write_bulk_flow(&path, &written, &record(), false).unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        assert!(text.contains("\"amplitude_err\": null"), "{text}");
        let read = read_bulk_flow(&path).unwrap();
        assert!(read.amplitude_err.is_nan() && read.galactic.cov[1][2].is_nan());
        let mut expected = written.clone();
        (expected.amplitude_err, expected.galactic.cov[1][2]) = (0.0, 0.0);
        let mut got = read;
        (got.amplitude_err, got.galactic.cov[1][2]) = (0.0, 0.0);
        assert_eq!(got, expected);
    }

    /// A result in the layout of the previous version (flat `v_galactic`, `cov`, fit
    /// details at the top level) reads into the current places.
    #[test]
    fn a_result_in_the_earlier_layout_still_reads() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("old.bulkflow.json");
        let axes =
            r#"{"v": [1.0, 2.0, 3.0], "cov": [[4.0, 0.0, 0.0], [0.0, 4.0, 0.0], [0.0, 0.0, 4.0]]}"#;
        let text = format!(
            r#"{{"v_galactic": [80.0, -230.0, 43.0],
                "cov": [[6400.0, 0.0, 0.0], [0.0, 6100.0, 0.0], [0.0, 0.0, 5900.0]],
                "amplitude": 247.3, "amplitude_err": 80.0, "l": 289.2, "b": 10.03,
                "supergalactic": {axes}, "equatorial": {axes},
                "sigma_star": 150.0, "sigma_star_fitted": true, "n_used": 380,
                "fit_space": "eta", "chi2": 391.0, "lcdm": null, "cautions": [],
                "record": {{}}}}"#
        );
        std::fs::write(&path, text).unwrap();
        let r = read_bulk_flow(&path).unwrap();
        assert_eq!(r.galactic.v, [80.0, -230.0, 43.0]);
        assert_eq!(r.galactic.cov[1][1], 6100.0);
        assert_eq!(r.fit.quantity, FitSpace::Eta);
        assert_eq!(r.fit.n_used, 380);
        assert_eq!(r.fit.sigma_star, 150.0);
        assert!(r.fit.sigma_star_fitted);
        assert_eq!(r.fit.chi2, 391.0);
        assert_eq!(r.supergalactic.v, [1.0, 2.0, 3.0]);
    }

    #[test]
    fn errors_name_the_file_and_say_what_is_wrong() {
        let dir = tempfile::tempdir().unwrap();
        let missing = dir.path().join("none.json");
        let e = read_bulk_flow(&missing).unwrap_err().to_string();
        assert!(e.starts_with(&missing.display().to_string()), "{e}");
        let not_json = dir.path().join("text.json");
        std::fs::write(&not_json, "l = 290").unwrap();
        let e = read_bulk_flow(&not_json).unwrap_err().to_string();
        assert!(
            e.starts_with(&not_json.display().to_string()) && e.contains("not JSON"),
            "{e}"
        );
        let other = dir.path().join("other.json");
        std::fs::write(&other, r#"{"amplitude": 250.0, "l": 290.0, "b": 10.0}"#).unwrap();
        let e = read_bulk_flow(&other).unwrap_err().to_string();
        assert!(
            e.starts_with(&other.display().to_string())
                && e.contains("not a flowsift bulk-flow result")
                && e.contains("missing field"),
            "{e}"
        );
        let space = dir.path().join("space.json");
        let mut value = serde_json::to_value(report(80.0, false)).unwrap();
        value["fit"]["quantity"] = "distance".into();
        std::fs::write(&space, value.to_string()).unwrap();
        let e = read_bulk_flow(&space).unwrap_err().to_string();
        assert!(e.contains("distance"), "{e}");
    }
}
