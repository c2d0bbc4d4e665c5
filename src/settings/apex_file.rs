//! Apex files: a user's own apices in TOML, one `[[apex]]` table per apex, e.g.
//!
//! ```toml
//! [[apex]]
//! frame = "local-group"
//! name = "my-lg"
//! speed_km_s = 308.0
//! l_deg = 105.0
//! b_deg = -7.0
//! source = "where the numbers come from"
//! ```
//!
//! or, instead of `speed_km_s`/`l_deg`/`b_deg`, the Galactic Cartesian velocity
//! `galactic_xyz_km_s = [x, y, z]` (x → l = 0, y → l = 90°, z → NGP). Each entry is then
//! selectable by name for its frame. The text is parsed here; the plan reads the file.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::SettingsError;
use crate::physics::restframe::{apex_table, observer_frame, Apex, OBSERVER_FRAMES};

/// One apex of the user's own, as written in an apex file (or kept in a run record).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ApexEntry {
    /// Frame the apex defines: `lsr`, `galactic-rest`, `local-group` or `cmb`.
    pub frame: String,
    /// Name to select it by (unique within its frame, not a built-in name).
    pub name: String,
    /// Speed of the Sun relative to the frame, km/s (with `l_deg`, `b_deg`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub speed_km_s: Option<f64>,
    /// Galactic longitude of the Sun's motion, degrees.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub l_deg: Option<f64>,
    /// Galactic latitude of the Sun's motion, degrees.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub b_deg: Option<f64>,
    /// Instead of speed and direction: the Sun's velocity in Galactic Cartesian axes, km/s.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub galactic_xyz_km_s: Option<[f64; 3]>,
    /// Where the numbers come from (printed with every result that uses the apex).
    pub source: String,
    /// The apex file the entry was read from (set by flowsift, not written by hand).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub file: Option<String>,
}

const KEYS: [&str; 7] = [
    "frame",
    "name",
    "speed_km_s",
    "l_deg",
    "b_deg",
    "galactic_xyz_km_s",
    "source",
];

impl ApexEntry {
    /// The checked apex. `origin` and `index` (1-based) name the entry in errors.
    pub fn to_apex(&self, origin: &str, index: usize) -> Result<Apex, SettingsError> {
        let err = |key: &str, problem: String| SettingsError::ApexEntry {
            origin: origin.to_string(),
            entry: describe_entry(index, Some(&self.name)),
            key: key.to_string(),
            problem,
        };
        let frame = observer_frame(&self.frame).ok_or_else(|| {
            err(
                "frame",
                format!(
                    "unknown frame '{}'; give one of {}",
                    self.frame,
                    OBSERVER_FRAMES.join(", ")
                ),
            )
        })?;
        let name = self.name.trim();
        if name.is_empty() || name.chars().any(|c| c.is_whitespace() || c == ',') {
            return Err(err(
                "name",
                format!(
                    "'{}' is not a usable name (give one word, no commas)",
                    self.name
                ),
            ));
        }
        if apex_table()
            .iter()
            .any(|a| a.frame == frame && a.name.eq_ignore_ascii_case(name))
        {
            return Err(err(
                "name",
                format!("'{name}' is a built-in {frame} apex; choose another name"),
            ));
        }
        if self.source.trim().is_empty() {
            return Err(err(
                "source",
                "is empty; say where the numbers come from".into(),
            ));
        }
        let mut apex = match (
            self.galactic_xyz_km_s,
            self.speed_km_s,
            self.l_deg,
            self.b_deg,
        ) {
            (Some(xyz), None, None, None) => Apex::from_velocity(name, frame, xyz, &self.source)
                .map_err(|e| err("galactic_xyz_km_s", e.to_string()))?,
            (Some(_), ..) => {
                return Err(err(
                    "galactic_xyz_km_s",
                    "give either galactic_xyz_km_s or speed_km_s, l_deg and b_deg, not both".into(),
                ))
            }
            (None, Some(v), Some(l), Some(b)) => {
                let key = if !(v.is_finite() && v >= 0.0) || v >= crate::physics::constants::C_KM_S
                {
                    "speed_km_s"
                } else if !l.is_finite() {
                    "l_deg"
                } else {
                    "b_deg"
                };
                Apex::from_speed_direction(name, frame, v, l, b, &self.source)
                    .map_err(|e| err(key, e.to_string()))?
            }
            (None, v, l, b) => {
                let missing = [("speed_km_s", v), ("l_deg", l), ("b_deg", b)]
                    .into_iter()
                    .find(|(_, x)| x.is_none())
                    .map(|(k, _)| k)
                    .unwrap_or("speed_km_s");
                return Err(err(
                    missing,
                    "is missing (give speed_km_s, l_deg and b_deg, or galactic_xyz_km_s)".into(),
                ));
            }
        };
        apex.file = self.file.clone();
        Ok(apex)
    }
}

fn describe_entry(index: usize, name: Option<&str>) -> String {
    match name {
        Some(n) if !n.trim().is_empty() => format!("[[apex]] entry {index} ('{}')", n.trim()),
        _ => format!("[[apex]] entry {index}"),
    }
}

/// Parse the text of an apex file; `origin` (the file's path) names the file in errors and
/// is kept with every entry. Every entry is checked, and names are unique per frame.
pub fn parse_apex_file(text: &str, origin: &str) -> Result<Vec<ApexEntry>, SettingsError> {
    let table: toml::Table = toml::from_str(text).map_err(|e| SettingsError::RunFile {
        origin: origin.to_string(),
        message: format!("not a valid apex file (TOML): {e}"),
    })?;
    let whole = |problem: String| SettingsError::RunFile {
        origin: origin.to_string(),
        message: problem,
    };
    if let Some(k) = table.keys().find(|k| k.as_str() != "apex") {
        return Err(whole(format!(
            "unknown top-level key '{k}'; an apex file holds only [[apex]] tables"
        )));
    }
    let Some(list) = table.get("apex") else {
        return Err(whole("holds no [[apex]] tables".into()));
    };
    let Some(list) = list.as_array() else {
        return Err(whole(
            "'apex' must be an array of tables, written [[apex]]".into(),
        ));
    };
    let mut out: Vec<ApexEntry> = Vec::with_capacity(list.len());
    for (i, item) in list.iter().enumerate() {
        let index = i + 1;
        let Some(t) = item.as_table() else {
            return Err(whole(format!(
                "{}: is not a table (write [[apex]] entries)",
                describe_entry(index, None)
            )));
        };
        let name = t.get("name").and_then(|v| v.as_str());
        let err = |key: &str, problem: String| SettingsError::ApexEntry {
            origin: origin.to_string(),
            entry: describe_entry(index, name),
            key: key.to_string(),
            problem,
        };
        if let Some(k) = t.keys().find(|k| !KEYS.contains(&k.as_str())) {
            return Err(err(
                k,
                format!("unknown key; the keys are {}", KEYS.join(", ")),
            ));
        }
        let text = |key: &str| -> Result<String, SettingsError> {
            match t.get(key) {
                Some(toml::Value::String(s)) => Ok(s.clone()),
                Some(v) => Err(err(key, format!("must be a string, got {v}"))),
                None => Err(err(key, "is missing".into())),
            }
        };
        let number = |key: &str| -> Result<Option<f64>, SettingsError> {
            match t.get(key) {
                None => Ok(None),
                Some(v) => as_number(v)
                    .map(Some)
                    .ok_or_else(|| err(key, format!("must be a number, got {v}"))),
            }
        };
        let xyz = match t.get("galactic_xyz_km_s") {
            None => None,
            Some(v) => {
                let parts: Option<Vec<f64>> = v
                    .as_array()
                    .map(|a| a.iter().map(as_number).collect::<Option<Vec<_>>>())
                    .unwrap_or(None);
                match parts {
                    Some(p) if p.len() == 3 => Some([p[0], p[1], p[2]]),
                    _ => {
                        return Err(err(
                            "galactic_xyz_km_s",
                            format!("must be three numbers [x, y, z] in km/s, got {v}"),
                        ))
                    }
                }
            }
        };
        let entry = ApexEntry {
            frame: text("frame")?,
            name: text("name")?,
            speed_km_s: number("speed_km_s")?,
            l_deg: number("l_deg")?,
            b_deg: number("b_deg")?,
            galactic_xyz_km_s: xyz,
            source: text("source")?,
            file: Some(origin.to_string()),
        };
        let apex = entry.to_apex(origin, index)?;
        if let Some(j) = out.iter().position(|e| {
            observer_frame(&e.frame) == Some(apex.frame) && e.name.eq_ignore_ascii_case(&apex.name)
        }) {
            return Err(err(
                "name",
                format!(
                    "'{}' is already the name of {} for frame {}",
                    apex.name,
                    describe_entry(j + 1, Some(&out[j].name)),
                    apex.frame
                ),
            ));
        }
        out.push(entry);
    }
    Ok(out)
}

/// A TOML number (integer or float) as f64.
fn as_number(v: &toml::Value) -> Option<f64> {
    match v {
        toml::Value::Float(x) => Some(*x),
        toml::Value::Integer(i) => Some(*i as f64),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"
[[apex]]
frame = "local-group"
name = "yahil1977"
speed_km_s = 308
l_deg = 105.0
b_deg = -7.0
source = "Yahil, Tammann & Sandage (1977)"

[[apex]]
frame = "galactic-rest"
name = "iau-rotation"
galactic_xyz_km_s = [11.1, 232.24, 7.25]
source = "test"
"#;

    #[test]
    fn a_good_file_parses_and_keeps_its_origin() {
        let e = parse_apex_file(GOOD, "a.toml").unwrap();
        assert_eq!(e.len(), 2);
        assert_eq!(e[0].speed_km_s, Some(308.0));
        let a = e[1].to_apex("a.toml", 2).unwrap();
        assert_eq!(a.frame, "galactic-rest");
        assert_eq!(a.file.as_deref(), Some("a.toml"));
    }

    /// Each fault names the file, the entry and the key.
    #[test]
    fn faults_name_file_entry_and_key() {
        let cases = [
            (
                GOOD.replace("b_deg = -7.0", "b_deg = -97.0"),
                "entry 1",
                "b_deg",
            ),
            (
                GOOD.replace("speed_km_s = 308", "speed_km_s = \"fast\""),
                "entry 1",
                "speed_km_s",
            ),
            (
                GOOD.replace("speed_km_s = 308\n", ""),
                "entry 1",
                "speed_km_s",
            ),
            (
                GOOD.replace("l_deg = 105.0", "l_dg = 105.0"),
                "entry 1",
                "l_dg",
            ),
            (
                GOOD.replace("\"local-group\"", "\"local-grop\""),
                "entry 1",
                "frame",
            ),
            (
                GOOD.replace("\"yahil1977\"", "\"courteau-vandenbergh1999\""),
                "entry 1",
                "name",
            ),
            (
                GOOD.replace("[11.1, 232.24, 7.25]", "[11.1, 232.24]"),
                "entry 2",
                "galactic_xyz_km_s",
            ),
            (
                GOOD.replace("\"iau-rotation\"", "\"yahil1977\"\nframe2 = 1"),
                "entry 2",
                "frame2",
            ),
            (
                GOOD.replace("source = \"test\"", "source = \"\""),
                "entry 2",
                "source",
            ),
        ];
        for (text, entry, key) in cases {
            let e = parse_apex_file(&text, "mine.toml").unwrap_err().to_string();
            assert!(e.starts_with("mine.toml: "), "{e}");
            assert!(e.contains(entry), "{e}");
            assert!(e.contains(&format!("key '{key}'")), "{e}");
        }
        let dup = format!(
            "{GOOD}\n{}",
            &GOOD[..GOOD.find("[[apex]]\nframe = \"galactic").unwrap()]
        );
        let e = parse_apex_file(&dup, "d.toml").unwrap_err().to_string();
        assert!(e.contains("entry 3") && e.contains("already"), "{e}");
        let e = parse_apex_file("[[apex]\n", "bad.toml")
            .unwrap_err()
            .to_string();
        assert!(e.starts_with("bad.toml: "), "{e}");
        let e = parse_apex_file("frame = 1\n", "top.toml")
            .unwrap_err()
            .to_string();
        assert!(e.contains("'frame'"), "{e}");
    }
}
