//! Which columns of the input play which role, and in which units.
//!
//! Order of precedence for each role: a name given by flag or run file; the default name
//! (case-insensitive); a FITS TUCD (IVOA UCD1+) that identifies the role unambiguously.
//! Units come from the flag or run file, else from TUNIT, else the default.

use serde::Serialize;

use crate::catalogue::Table;
use crate::physics::cosmology::LengthUnit;
use crate::physics::estimators::DistanceKind;
pub use crate::settings::{AngleUnit, ColumnChoice, RedshiftUnit};

/// One resolved column and how it was found.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Resolved {
    pub column: String,
    pub found_by: String,
}

/// The resolved mapping.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ColumnPlan {
    pub ra: Resolved,
    pub dec: Resolved,
    pub z: Resolved,
    pub z_unit: RedshiftUnit,
    pub z_err: Option<Resolved>,
    pub distance: Resolved,
    pub distance_kind: DistanceKind,
    pub distance_err: Option<Resolved>,
    pub group_id: Option<Resolved>,
    /// None: decide per column (text → sexagesimal, numbers → degrees).
    pub angle_unit: Option<AngleUnit>,
    pub length_unit: LengthUnit,
}

impl ColumnPlan {
    /// The mapping as a column choice with every role named (what a record keeps, and what
    /// a later step on the output starts from).
    pub fn as_choice(&self) -> ColumnChoice {
        let name = |r: &Option<Resolved>| r.as_ref().map(|r| r.column.clone());
        ColumnChoice {
            ra: Some(self.ra.column.clone()),
            dec: Some(self.dec.column.clone()),
            z: Some(self.z.column.clone()),
            z_unit: Some(self.z_unit),
            z_err: name(&self.z_err),
            distance: Some(self.distance.column.clone()),
            distance_kind: Some(self.distance_kind),
            distance_err: name(&self.distance_err),
            group_id: name(&self.group_id),
            angle_unit: self.angle_unit,
        }
    }

    /// How each role was found, by role.
    pub fn sources(&self) -> std::collections::BTreeMap<String, String> {
        let mut m = std::collections::BTreeMap::new();
        for (role, r) in [
            ("ra", Some(&self.ra)),
            ("dec", Some(&self.dec)),
            ("z", Some(&self.z)),
            ("z_err", self.z_err.as_ref()),
            ("distance", Some(&self.distance)),
            ("distance_err", self.distance_err.as_ref()),
            ("group_id", self.group_id.as_ref()),
        ] {
            if let Some(r) = r {
                m.insert(role.to_string(), format!("{} ({})", r.column, r.found_by));
            }
        }
        m
    }

    /// Lines for the terminal: role → column (how found).
    pub fn describe(&self) -> Vec<String> {
        let mut out = vec![];
        let mut add = |role: &str, r: &Option<Resolved>, extra: String| {
            if let Some(r) = r {
                out.push(format!("{role:<13} ← {} ({}){extra}", r.column, r.found_by));
            }
        };
        let angle = match self.angle_unit {
            Some(u) => format!(", {u:?}").to_lowercase(),
            None => String::new(),
        };
        add("ra", &Some(self.ra.clone()), angle.clone());
        add("dec", &Some(self.dec.clone()), angle);
        add(
            "z_helio",
            &Some(self.z.clone()),
            format!(
                ", as {}",
                if self.z_unit == RedshiftUnit::Cz {
                    "cz in km/s"
                } else {
                    "z"
                }
            ),
        );
        add("z_err", &self.z_err, String::new());
        let unit = match self.distance_kind {
            DistanceKind::Mu => "mag".to_string(),
            DistanceKind::Eta => "dex".to_string(),
            _ => self.length_unit.label().to_string(),
        };
        add(
            &format!("distance ({})", self.distance_kind.name()),
            &Some(self.distance.clone()),
            format!(", {unit}"),
        );
        add("distance_err", &self.distance_err, String::new());
        add("group_id", &self.group_id, String::new());
        out
    }
}

/// Find a column by exact name, else case-insensitively.
pub(crate) fn find_name(names: &[String], wanted: &str) -> Option<String> {
    names
        .iter()
        .find(|n| *n == wanted)
        .or_else(|| names.iter().find(|n| n.eq_ignore_ascii_case(wanted)))
        .cloned()
}

fn ucd_words(ucd: &str) -> Vec<String> {
    ucd.split(';')
        .map(|w| w.trim().to_ascii_lowercase())
        .collect()
}

/// The one column whose UCD satisfies `pred`, if exactly one does.
fn find_by_ucd(
    table: &Table,
    names: &[String],
    pred: impl Fn(&[String]) -> bool,
) -> Option<String> {
    let hits: Vec<_> = names
        .iter()
        .filter(|n| {
            table
                .meta
                .get(*n)
                .and_then(|m| m.ucd.as_deref())
                .map(|u| pred(&ucd_words(u)))
                .unwrap_or(false)
        })
        .cloned()
        .collect();
    (hits.len() == 1).then(|| hits[0].clone())
}

fn unit_of(table: &Table, name: &str) -> Option<String> {
    table
        .meta
        .get(name)
        .and_then(|m| m.unit.clone())
        .map(|u| u.trim().to_string())
}

fn normalise_unit(u: &str) -> String {
    u.to_ascii_lowercase().replace([' ', '.', '*'], "")
}

/// Resolve the mapping. `length_unit` is the user's choice (flag/run file), if any.
pub fn resolve_columns(
    table: &Table,
    choice: &ColumnChoice,
    length_unit: Option<LengthUnit>,
) -> Result<ColumnPlan, String> {
    let names: Vec<String> = table
        .frame
        .get_column_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let listing = names.join(", ");
    let mut problems: Vec<String> = vec![];
    let by_flag = "named by flag or run file".to_string();

    let required = |role: &str,
                    given: &Option<String>,
                    default: &[&str],
                    ucd: &dyn Fn(&[String]) -> bool,
                    problems: &mut Vec<String>|
     -> Option<Resolved> {
        if let Some(g) = given {
            return match find_name(&names, g) {
                Some(c) => Some(Resolved {
                    column: c,
                    found_by: by_flag.clone(),
                }),
                None => {
                    problems.push(format!("the {role} column '{g}' is not in the file"));
                    None
                }
            };
        }
        for d in default {
            if let Some(c) = find_name(&names, d) {
                return Some(Resolved {
                    column: c,
                    found_by: "default name".into(),
                });
            }
        }
        if let Some(c) = find_by_ucd(table, &names, ucd) {
            let u = table
                .meta
                .get(&c)
                .and_then(|m| m.ucd.clone())
                .unwrap_or_default();
            return Some(Resolved {
                column: c,
                found_by: format!("UCD {u}"),
            });
        }
        problems.push(format!(
            "no {role} column: expected one named {} (or a flag naming it)",
            default.join(" or ")
        ));
        None
    };

    let is_err = |w: &[String]| w.iter().any(|x| x.starts_with("stat.error"));
    let ra = required(
        "right-ascension",
        &choice.ra,
        &["ra"],
        &|w| w.iter().any(|x| x == "pos.eq.ra"),
        &mut problems,
    );
    let dec = required(
        "declination",
        &choice.dec,
        &["dec"],
        &|w| w.iter().any(|x| x == "pos.eq.dec"),
        &mut problems,
    );
    let z = required(
        "redshift",
        &choice.z,
        &["z_helio", "cz_helio"],
        &|w| w.iter().any(|x| x == "src.redshift") && !is_err(w),
        &mut problems,
    );

    // Redshift unit: flag, else the default name, else TUNIT.
    let z_unit = match (&choice.z_unit, &z) {
        (Some(u), _) => *u,
        (None, Some(r)) => {
            let unit = unit_of(table, &r.column).map(|u| normalise_unit(&u));
            if matches!(
                unit.as_deref(),
                Some("km/s") | Some("kms-1") | Some("km/sec")
            ) || r.column.eq_ignore_ascii_case("cz_helio")
            {
                RedshiftUnit::Cz
            } else {
                RedshiftUnit::Z
            }
        }
        (None, None) => RedshiftUnit::Z,
    };

    // Distance: exactly one.
    let distance_kinds = [
        DistanceKind::Mu,
        DistanceKind::Dl,
        DistanceKind::Dc,
        DistanceKind::Eta,
    ];
    let (distance, distance_kind) = match &choice.distance {
        Some(g) => match find_name(&names, g) {
            Some(c) => {
                let kind = choice
                    .distance_kind
                    .or_else(|| {
                        distance_kinds
                            .iter()
                            .copied()
                            .find(|k| c.eq_ignore_ascii_case(k.name()))
                    })
                    .or_else(|| {
                        unit_of(table, &c).and_then(|u| match normalise_unit(&u).as_str() {
                            "mag" => Some(DistanceKind::Mu),
                            _ => None,
                        })
                    });
                match kind {
                    Some(k) => (
                        Some(Resolved {
                            column: c,
                            found_by: by_flag.clone(),
                        }),
                        Some(k),
                    ),
                    None => {
                        problems.push(format!(
                            "say what the distance column '{c}' holds with --distance-kind mu|dl|dc|eta"
                        ));
                        (None, None)
                    }
                }
            }
            None => {
                problems.push(format!("the distance column '{g}' is not in the file"));
                (None, None)
            }
        },
        None => {
            let present: Vec<(String, DistanceKind)> = distance_kinds
                .iter()
                .filter_map(|k| find_name(&names, k.name()).map(|c| (c, *k)))
                .collect();
            match present.len() {
                1 => {
                    let (c, k) = present[0].clone();
                    let k = choice.distance_kind.unwrap_or(k);
                    (
                        Some(Resolved {
                            column: c,
                            found_by: "default name".into(),
                        }),
                        Some(k),
                    )
                }
                0 => {
                    if let Some(c) = find_by_ucd(table, &names, |w| {
                        w.iter().any(|x| x == "phot.mag.distmod") && !is_err(w)
                    }) {
                        let u = table
                            .meta
                            .get(&c)
                            .and_then(|m| m.ucd.clone())
                            .unwrap_or_default();
                        (
                            Some(Resolved {
                                column: c,
                                found_by: format!("UCD {u}"),
                            }),
                            Some(choice.distance_kind.unwrap_or(DistanceKind::Mu)),
                        )
                    } else {
                        problems.push("no distance column: expected one named mu, dl, dc or eta (or --distance-column with --distance-kind)".into());
                        (None, None)
                    }
                }
                _ => {
                    let found: Vec<_> = present.iter().map(|p| p.0.clone()).collect();
                    problems.push(format!(
                        "several distance columns ({}): choose one with --distance-column",
                        found.join(", ")
                    ));
                    (None, None)
                }
            }
        }
    };

    let optional = |given: &Option<String>,
                    defaults: &[String],
                    problems: &mut Vec<String>,
                    role: &str|
     -> Option<Resolved> {
        if let Some(g) = given {
            return match find_name(&names, g) {
                Some(c) => Some(Resolved {
                    column: c,
                    found_by: by_flag.clone(),
                }),
                None => {
                    problems.push(format!("the {role} column '{g}' is not in the file"));
                    None
                }
            };
        }
        defaults
            .iter()
            .find_map(|d| find_name(&names, d))
            .map(|c| Resolved {
                column: c,
                found_by: "default name".into(),
            })
    };
    let z_err_defaults: Vec<String> = match (&z, z_unit) {
        (Some(r), _) => vec![
            format!("{}_err", r.column),
            if z_unit == RedshiftUnit::Cz {
                "cz_err".into()
            } else {
                "z_err".into()
            },
        ],
        _ => vec!["z_err".into()],
    };
    let mut z_err = optional(
        &choice.z_err,
        &z_err_defaults,
        &mut problems,
        "redshift-error",
    );
    if z_err.is_none() && choice.z_err.is_none() {
        if let Some(c) = find_by_ucd(table, &names, |w| {
            w.iter().any(|x| x == "src.redshift") && is_err(w)
        }) {
            z_err = Some(Resolved {
                column: c,
                found_by: "UCD".into(),
            });
        }
    }
    let distance_err = match &distance {
        Some(d) => optional(
            &choice.distance_err,
            &[format!("{}_err", d.column)],
            &mut problems,
            "distance-error",
        ),
        None => None,
    };
    let group_id = optional(
        &choice.group_id,
        &["group_id".to_string()],
        &mut problems,
        "group",
    );

    // Length unit: flag, else TUNIT of the distance column.
    let length_unit = length_unit.unwrap_or_else(|| match (&distance, distance_kind) {
        (Some(d), Some(DistanceKind::Dl | DistanceKind::Dc)) => match unit_of(table, &d.column)
            .map(|u| normalise_unit(&u))
            .as_deref()
        {
            Some("mpc/h") | Some("h-1mpc") | Some("mpch-1") | Some("mpc/h70") => {
                LengthUnit::MpcOverH
            }
            _ => LengthUnit::Mpc,
        },
        _ => LengthUnit::Mpc,
    });
    let angle_unit = choice.angle_unit.or_else(|| {
        ra.as_ref()
            .and_then(|r| unit_of(table, &r.column))
            .and_then(|u| match normalise_unit(&u).as_str() {
                "rad" => Some(AngleUnit::Rad),
                _ => None,
            })
    });

    if !problems.is_empty() {
        return Err(format!(
            "{}\n  columns in the file: {listing}",
            problems.join("\n  ")
        ));
    }
    Ok(ColumnPlan {
        ra: ra.expect("checked"),
        dec: dec.expect("checked"),
        z: z.expect("checked"),
        z_unit,
        z_err,
        distance: distance.expect("checked"),
        distance_kind: distance_kind.expect("checked"),
        distance_err,
        group_id,
        angle_unit,
        length_unit,
    })
}
