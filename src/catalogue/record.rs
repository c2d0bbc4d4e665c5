//! The record of one flowsift step — every setting as the value used, the files read, the
//! column roles, the cautions — written with each output (entry `record` of its provenance,
//! as JSON) beside flat entries a person can read, and read back by the next step through
//! [`read_record`]. A step run on a flowsift output nests the input's record as `previous`,
//! so an output carries the whole chain of steps that made it.

use std::collections::BTreeMap;
use std::path::Path;

use serde::{Deserialize, Serialize};

use super::provenance::{read_provenance, Provenance};
use super::CatalogueError;
use crate::settings::RunConfig;

/// Provenance key of the record.
pub const RECORD_KEY: &str = "record";

/// Version of the record's layout; a reader refuses newer ones by name.
pub const RECORD_VERSION: u32 = 1;

/// Steps whose outputs carry velocities derived under the recorded settings: a later step on
/// such an output must use the same cosmology, frames, conventions and columns.
pub const ANALYSIS_STEPS: &[&str] = &["velocities", "groups", "malmquist", "outliers", "export"];

/// A file a step read, and its role (`catalogue`, `field`, `density`, `profile`, `run file`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputFile {
    pub role: String,
    pub path: String,
}

/// The CMB apex in numbers, for readers who do not know its name.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ApexRecord {
    pub name: String,
    pub speed_km_s: f64,
    pub glon_deg: f64,
    pub glat_deg: f64,
    pub source: String,
}

/// Rows in and rows with a velocity.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RowCounts {
    pub read: usize,
    pub ok: usize,
}

/// What one step did.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunRecord {
    pub version: u32,
    /// `flowsift <version>`.
    pub software: String,
    /// The subcommand: velocities, groups, malmquist, outliers, bulkflow, export, correct,
    /// mock, field, plot.
    pub step: String,
    /// The command line as typed.
    pub command: String,
    /// When the output was written, UTC.
    pub date: String,
    /// The files read, the catalogue first.
    pub inputs: Vec<InputFile>,
    /// The settings of the step with every default filled in as the value used (sections of
    /// stages that did not run are absent).
    pub settings: RunConfig,
    /// Where the cosmology came from (preset and its source, or user parameters).
    pub cosmology_source: Option<String>,
    /// The CMB apex used.
    pub cmb_apex: Option<ApexRecord>,
    /// How each column role was found (`named by flag or run file`, `default name`, a UCD,
    /// `the input's record`).
    pub column_sources: BTreeMap<String, String>,
    pub rows: Option<RowCounts>,
    /// Facts particular to the step (the velocity model of `correct`, the mock's spec, the
    /// export's counts …), as text.
    pub details: BTreeMap<String, String>,
    /// The cautions printed with the run.
    pub cautions: Vec<String>,
    /// Settings given against the input's record with `--override-input-settings`.
    pub overridden: Vec<String>,
    /// The record of the input, when the input was a flowsift output.
    pub previous: Option<Box<RunRecord>>,
}

impl RunRecord {
    /// A record with the identity fields set and everything else empty.
    pub fn new(step: &str, command: &str, date: &str) -> RunRecord {
        RunRecord {
            version: RECORD_VERSION,
            software: format!("flowsift {}", env!("CARGO_PKG_VERSION")),
            step: step.to_string(),
            command: command.to_string(),
            date: date.to_string(),
            inputs: vec![],
            settings: RunConfig::default(),
            cosmology_source: None,
            cmb_apex: None,
            column_sources: BTreeMap::new(),
            rows: None,
            details: BTreeMap::new(),
            cautions: vec![],
            overridden: vec![],
            previous: None,
        }
    }

    /// Whether a later step must keep this record's settings (see [`ANALYSIS_STEPS`]).
    pub fn binds_later_steps(&self) -> bool {
        ANALYSIS_STEPS.contains(&self.step.as_str())
    }

    /// The nearest record in the chain (this one first) that binds later steps.
    pub fn binding(&self) -> Option<&RunRecord> {
        let mut r = Some(self);
        while let Some(x) = r {
            if x.binds_later_steps() {
                return Some(x);
            }
            r = x.previous.as_deref();
        }
        None
    }

    /// The steps of the chain, oldest first (`mock → velocities → outliers`).
    pub fn chain(&self) -> Vec<&str> {
        let mut steps = vec![];
        let mut r = Some(self);
        while let Some(x) = r {
            steps.push(x.step.as_str());
            r = x.previous.as_deref();
        }
        steps.reverse();
        steps
    }

    /// Provenance entries: flat ones for people (the settings one per entry, JSON where a
    /// value is a structure), then the whole record under [`RECORD_KEY`].
    pub fn to_provenance(&self) -> Provenance {
        let mut e: Vec<(String, String)> = vec![];
        let mut add = |k: &str, v: String| e.push((k.to_string(), v));
        let json = |v: &dyn ErasedJson| v.json();
        add("software", self.software.clone());
        add("stage", self.step.clone());
        add("command", self.command.clone());
        add("date", self.date.clone());
        if let Some(first) = self.inputs.first() {
            add("input", first.path.clone());
        }
        for f in self.inputs.iter().skip(1) {
            add(
                &format!("input_{}", f.role.replace(' ', "_")),
                f.path.clone(),
            );
        }
        if self.previous.is_some() {
            add("chain", self.chain().join(" → "));
        }
        if let Some(r) = self.rows {
            add("input_rows", r.read.to_string());
            add("rows_ok", r.ok.to_string());
        }
        let s = &self.settings;
        if s.cosmology != Default::default() {
            add(
                "cosmology",
                serde_json::json!({
                    "params": {
                        "h0": s.cosmology.h0, "omega_m": s.cosmology.omega_m,
                        "omega_de": s.cosmology.omega_de, "omega_r": s.cosmology.omega_r,
                        "w0": s.cosmology.w0, "wa": s.cosmology.wa,
                    },
                    "preset": s.cosmology.preset,
                    "omega_k": match (s.cosmology.omega_m, s.cosmology.omega_de, s.cosmology.omega_r) {
                        (Some(m), Some(d), Some(r)) => Some(1.0 - m - d - r),
                        _ => None,
                    },
                    "source": self.cosmology_source,
                })
                .to_string(),
            );
        }
        if let Some(a) = &self.cmb_apex {
            add("cmb_apex", json(a));
        }
        if let Some(b) = s.frame.boost {
            add("boost", b.name().to_string());
        }
        if let Some(x) = &s.frame.local_group {
            add("local_group_apex", x.clone());
        }
        if let Some(x) = &s.frame.galactic_rest {
            add("galactic_rest_apex", x.clone());
        }
        if let Some(c) = s.conventions.dl_convention {
            add("dl_convention", c.name().to_string());
        }
        if let Some(u) = s.conventions.length_unit {
            add("length_unit", u.label().to_string());
        }
        if let Some(x) = s.conventions.sigma_star {
            add("sigma_star_km_s", x.to_string());
        }
        if s.columns != Default::default() {
            add("columns", json(&s.columns));
        }
        if let Some(d) = s.errors.monte_carlo {
            add("monte_carlo_draws", d.to_string());
            if d >= 2 {
                add("monte_carlo_seed", s.errors.seed.unwrap_or(1).to_string());
            }
        }
        for (k, v) in [
            ("malmquist", s.malmquist.as_ref().map(|x| json(x))),
            ("groups", s.groups.as_ref().map(|x| json(x))),
            ("outliers", s.outliers.as_ref().map(|x| json(x))),
            ("bulk_flow", s.bulk_flow.as_ref().map(|x| json(x))),
            ("export", s.export.as_ref().map(|x| json(x))),
        ] {
            if let Some(v) = v {
                add(k, v);
            }
        }
        for (k, v) in &self.details {
            add(k, v.clone());
        }
        if !self.overridden.is_empty() {
            add("overridden_input_settings", self.overridden.join(" | "));
        }
        if !self.cautions.is_empty() {
            add("cautions", self.cautions.join(" | "));
        }
        add(RECORD_KEY, json(self));
        Provenance { entries: e }
    }

    /// The record among provenance entries: None when there is none (a file from elsewhere,
    /// or from a flowsift version before records).
    pub fn from_provenance(p: &Provenance) -> Result<Option<RunRecord>, String> {
        let Some(text) = p.get(RECORD_KEY) else {
            return Ok(None);
        };
        let v: serde_json::Value = serde_json::from_str(text)
            .map_err(|e| format!("the provenance entry '{RECORD_KEY}' is not JSON: {e}"))?;
        let version = v.get("version").and_then(|x| x.as_u64()).unwrap_or(0);
        if version > RECORD_VERSION as u64 {
            return Err(format!(
                "the file was written by a newer flowsift (record version {version}; this one reads up to {RECORD_VERSION})"
            ));
        }
        serde_json::from_value(v)
            .map(Some)
            .map_err(|e| format!("the provenance entry '{RECORD_KEY}' is not a run record: {e}"))
    }
}

/// The record a flowsift output carries, from whichever place its format keeps provenance.
pub fn read_record(path: &Path, hdu: Option<&str>) -> Result<Option<RunRecord>, CatalogueError> {
    let found = read_provenance(path, hdu)?;
    RunRecord::from_provenance(&found.provenance).map_err(|e| CatalogueError::read(path, e))
}

/// Serialise anything serialisable to compact JSON (for provenance values).
trait ErasedJson {
    fn json(&self) -> String;
}

impl<T: Serialize> ErasedJson for T {
    fn json(&self) -> String {
        serde_json::to_string(self).unwrap_or_default()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn record_round_trips_through_provenance_with_its_chain() {
        let mut first = RunRecord::new(
            "velocities",
            "flowsift velocities a.csv -o b.fits",
            "2026-12-02T00:00:00Z",
        );
        first.settings.cosmology.preset = Some("planck2018".into());
        first.settings.cosmology.h0 = Some(67.66);
        first.inputs.push(InputFile {
            role: "catalogue".into(),
            path: "a.csv".into(),
        });
        let mut second = RunRecord::new(
            "outliers",
            "flowsift outliers b.fits -o c.fits",
            "2026-12-02T00:01:00Z",
        );
        second.previous = Some(Box::new(first.clone()));
        let p = second.to_provenance();
        let back = RunRecord::from_provenance(&p).unwrap().unwrap();
        assert_eq!(back, second);
        assert_eq!(back.chain(), vec!["velocities", "outliers"]);
        assert_eq!(back.binding().unwrap().step, "outliers");
        assert_eq!(p.get("chain"), Some("velocities → outliers"));
    }

    #[test]
    fn newer_records_are_refused_by_name() {
        let p = Provenance {
            entries: vec![(RECORD_KEY.into(), "{\"version\": 99}".into())],
        };
        let e = RunRecord::from_provenance(&p).unwrap_err();
        assert!(e.contains("newer flowsift"), "{e}");
    }

    #[test]
    fn a_mock_does_not_bind_but_an_analysis_step_does() {
        let mock = RunRecord::new("mock", "", "");
        assert!(mock.binding().is_none());
        let mut v = RunRecord::new("velocities", "", "");
        v.previous = Some(Box::new(mock));
        assert_eq!(v.binding().unwrap().step, "velocities");
    }
}
