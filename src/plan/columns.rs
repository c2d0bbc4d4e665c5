//! Which columns of the input play which role, and in which units.
//!
//! Order of precedence for each role: a name given by flag or run file; the default name
//! (case-insensitive); a FITS TUCD (IVOA UCD1+) that identifies the role unambiguously.
//! Units come from the flag or run file, else from TUNIT, else the default.

use serde::Serialize;

use crate::catalogue::units::{parse_unit, Unit};
use crate::catalogue::Table;
use crate::physics::cosmology::LengthUnit;
use crate::physics::estimators::DistanceKind;

use super::error::ColumnError;
pub use crate::settings::{AngleUnit, ColumnChoice, GivenFrame, InputSkyFrame, RedshiftUnit};

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
    /// The sky frame of `ra`/`dec` (longitude and latitude in it).
    pub sky_frame: InputSkyFrame,
    /// The rest frame of the redshift column.
    pub z_frame: GivenFrame,
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
            sky_frame: Some(self.sky_frame),
            z_frame: Some(self.z_frame),
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
        let [lon, lat] = match self.sky_frame {
            InputSkyFrame::Icrs => ["ra", "dec"],
            InputSkyFrame::Fk5 => ["ra (fk5)", "dec (fk5)"],
            InputSkyFrame::Fk4 => ["ra (fk4)", "dec (fk4)"],
            InputSkyFrame::Galactic => ["l", "b"],
            InputSkyFrame::Supergalactic => ["sgl", "sgb"],
        };
        add(lon, &Some(self.ra.clone()), angle.clone());
        add(lat, &Some(self.dec.clone()), angle);
        let z_role = match self.z_frame {
            GivenFrame::Helio => "z_helio".to_string(),
            other => format!("z ({})", other.name()),
        };
        add(
            &z_role,
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

/// The unit card of a column, read by the one unit reader (None: no card, or a blank one).
fn unit_of(table: &Table, name: &str) -> Option<Unit> {
    table
        .meta
        .get(name)
        .and_then(|m| m.unit.as_deref())
        .filter(|u| !u.trim().is_empty())
        .map(parse_unit)
}

fn ucd_of(table: &Table, name: &str) -> Option<String> {
    table.meta.get(name).and_then(|m| m.ucd.clone())
}

fn is_error(w: &[String]) -> bool {
    w.iter().any(|x| x.starts_with("stat.error"))
}

/// What the user called the flag for a role, for messages.
const DISTANCE_KIND_FLAG: &str = "--distance-kind (run file: columns.distance_kind)";

/// Roles are found by: a name given by flag or run file; a default name (exact, then
/// case-insensitive); a UCD that exactly one column carries.
struct Finder<'a> {
    table: &'a Table,
    names: Vec<String>,
    problems: Vec<String>,
}

impl<'a> Finder<'a> {
    fn new(table: &'a Table) -> Finder<'a> {
        Finder {
            table,
            names: table
                .frame
                .get_column_names()
                .iter()
                .map(|s| s.to_string())
                .collect(),
            problems: vec![],
        }
    }

    fn named(&mut self, role: &str, given: &str) -> Option<Resolved> {
        match find_name(&self.names, given) {
            Some(c) => Some(Resolved {
                column: c,
                found_by: "named by flag or run file".into(),
            }),
            None => {
                self.problems
                    .push(format!("the {role} column '{given}' is not in the file"));
                None
            }
        }
    }

    fn by_default(&self, defaults: &[&str]) -> Option<Resolved> {
        defaults.iter().find_map(|d| {
            find_name(&self.names, d).map(|c| Resolved {
                column: c,
                found_by: "default name".into(),
            })
        })
    }

    fn by_ucd(&self, pred: &dyn Fn(&[String]) -> bool) -> Option<Resolved> {
        find_by_ucd(self.table, &self.names, pred).map(|c| Resolved {
            found_by: format!("UCD {}", ucd_of(self.table, &c).unwrap_or_default()),
            column: c,
        })
    }

    /// A role the run cannot do without.
    fn required(
        &mut self,
        role: &str,
        given: &Option<String>,
        defaults: &[&str],
        ucd: &dyn Fn(&[String]) -> bool,
    ) -> Option<Resolved> {
        if let Some(g) = given {
            return self.named(role, g);
        }
        let found = self.by_default(defaults).or_else(|| self.by_ucd(ucd));
        if found.is_none() {
            self.problems.push(format!(
                "no {role} column: expected one named {} (or a flag naming it)",
                defaults.join(" or ")
            ));
        }
        found
    }

    /// A role the run can do without.
    fn optional(
        &mut self,
        role: &str,
        given: &Option<String>,
        defaults: &[&str],
        ucd: &dyn Fn(&[String]) -> bool,
    ) -> Option<Resolved> {
        match given {
            Some(g) => self.named(role, g),
            None => self.by_default(defaults).or_else(|| self.by_ucd(ucd)),
        }
    }
}

/// The sky position and redshift of each row, as every catalogue command reads them.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RedshiftColumns {
    pub ra: Resolved,
    pub dec: Resolved,
    pub z: Resolved,
    pub z_unit: RedshiftUnit,
    pub z_err: Option<Resolved>,
    /// None: decide per column (text → sexagesimal, numbers → degrees).
    pub angle_unit: Option<AngleUnit>,
    pub sky_frame: InputSkyFrame,
    pub z_frame: GivenFrame,
}

/// The default redshift column names of a rest frame: `z_<frame>`, `cz_<frame>`.
fn z_defaults(frame: GivenFrame) -> [String; 2] {
    [
        format!("z_{}", frame.name()),
        format!("cz_{}", frame.name()),
    ]
}

/// Default (longitude, latitude) column names and UCD words of a sky frame (the UCD1+
/// `pos.eq`, `pos.galactic`, `pos.supergalactic` words).
fn sky_defaults(frame: InputSkyFrame) -> ([&'static str; 2], [&'static str; 2]) {
    match frame {
        InputSkyFrame::Icrs | InputSkyFrame::Fk5 | InputSkyFrame::Fk4 => {
            (["ra", "dec"], ["pos.eq.ra", "pos.eq.dec"])
        }
        InputSkyFrame::Galactic => (["glon", "glat"], ["pos.galactic.lon", "pos.galactic.lat"]),
        InputSkyFrame::Supergalactic => (
            ["sgl", "sgb"],
            ["pos.supergalactic.lon", "pos.supergalactic.lat"],
        ),
    }
}

/// The sky frame: the flag; else the first frame whose default longitude and latitude
/// columns (or UCDs) are both in the file, ICRS first; else ICRS. An equatorial frame is the
/// one the file's `RADESYS`/`EQUINOX` keywords state, when they do.
fn sky_frame_of(f: &mut Finder<'_>, choice: &ColumnChoice) -> InputSkyFrame {
    if let Some(frame) = choice.sky_frame {
        return frame;
    }
    let by_columns = if choice.ra.is_some() || choice.dec.is_some() {
        InputSkyFrame::Icrs
    } else {
        [
            InputSkyFrame::Icrs,
            InputSkyFrame::Galactic,
            InputSkyFrame::Supergalactic,
        ]
        .into_iter()
        .find(|frame| {
            let (names, ucds) = sky_defaults(*frame);
            (0..2).all(|k| {
                f.by_default(&[names[k]]).is_some()
                    || f.by_ucd(&|w: &[String]| w.iter().any(|x| x == ucds[k]))
                        .is_some()
            })
        })
        .unwrap_or_default()
    };
    if !by_columns.is_equatorial() {
        return by_columns;
    }
    match equatorial_frame_stated(&f.table.keywords) {
        Ok(Some(frame)) => frame,
        Ok(None) => by_columns,
        Err(why) => {
            f.problems.push(why);
            by_columns
        }
    }
}

/// The equatorial frame a FITS header states: `RADESYS` ICRS, FK5 or FK4, with an `EQUINOX`
/// that fits it (2000 for FK5, 1950 for FK4); with `EQUINOX` alone, FK4 before 1984 and FK5
/// from then (FITS Standard 4.0 §8.1, the default for a missing RADESYS; from memory).
fn equatorial_frame_stated(
    keywords: &std::collections::BTreeMap<String, String>,
) -> Result<Option<InputSkyFrame>, String> {
    let system = keywords
        .get("RADESYS")
        .map(|v| v.trim().to_ascii_uppercase());
    let equinox_text = keywords.get("EQUINOX").map(|v| v.trim().to_string());
    let equinox = match &equinox_text {
        None => None,
        Some(t) => Some(
            t.trim_start_matches(['J', 'B', 'j', 'b'])
                .parse::<f64>()
                .map_err(|_| format!("the header keyword EQUINOX = '{t}' is not a year"))?,
        ),
    };
    let refuse = |what: String| {
        Err(format!(
            "{what}: flowsift converts ICRS, FK5 J2000 and FK4 B1950 positions; give \
             --sky-frame to say which the columns hold"
        ))
    };
    let frame = match system.as_deref() {
        None => match equinox {
            None => return Ok(None),
            Some(e) if e < 1984.0 => InputSkyFrame::Fk4,
            Some(_) => InputSkyFrame::Fk5,
        },
        Some("ICRS") => return Ok(Some(InputSkyFrame::Icrs)),
        Some("FK5") => InputSkyFrame::Fk5,
        Some("FK4") => InputSkyFrame::Fk4,
        Some(other) => return refuse(format!("the header states RADESYS = '{other}'")),
    };
    let wanted = if frame == InputSkyFrame::Fk5 {
        2000.0
    } else {
        1950.0
    };
    match equinox {
        Some(e) if (e - wanted).abs() > 1e-6 => refuse(format!(
            "the header states {} with EQUINOX = {e}",
            frame.name().to_ascii_uppercase()
        )),
        _ => Ok(Some(frame)),
    }
}

/// The rest frame a FITS header's `SPECSYS` states (Greisen et al. 2006, A&A 446, 747,
/// Table 7 of the spectral-coordinate paper; values from memory). Barycentric is taken as
/// heliocentric: the two differ by the Sun's motion about the barycentre, ~0.01 km/s.
fn rest_frame_stated(
    keywords: &std::collections::BTreeMap<String, String>,
) -> Result<Option<GivenFrame>, String> {
    let Some(v) = keywords.get("SPECSYS") else {
        return Ok(None);
    };
    Ok(Some(match v.trim().to_ascii_uppercase().as_str() {
        "HELIOCEN" | "BARYCENT" => GivenFrame::Helio,
        "LSRK" => GivenFrame::Lsr,
        "GALACTOC" => GivenFrame::Gsr,
        "LOCALGRP" => GivenFrame::Lg,
        "CMBDIPOL" => GivenFrame::Cmb,
        other => {
            return Err(format!(
                "the header states SPECSYS = '{other}': flowsift takes redshifts in the \
                 HELIOCEN/BARYCENT, LSRK, GALACTOC, LOCALGRP or CMBDIPOL frames; give \
                 --z-frame to say which the column is in"
            ))
        }
    }))
}

/// All default redshift column names, frame by frame (heliocentric first).
fn all_z_defaults() -> Vec<String> {
    [
        GivenFrame::Helio,
        GivenFrame::Cmb,
        GivenFrame::Lg,
        GivenFrame::Gsr,
        GivenFrame::Lsr,
    ]
    .into_iter()
    .flat_map(z_defaults)
    .collect()
}

/// The redshift's rest frame: the flag; else what the column's name says and what the
/// header's `SPECSYS` says (a conflict between the two is reported); else heliocentric.
fn z_frame_of(f: &mut Finder<'_>, choice: &ColumnChoice, z: Option<&Resolved>) -> GivenFrame {
    if let Some(frame) = choice.z_frame {
        return frame;
    }
    let by_name = z.and_then(|r| GivenFrame::from_column_name(&r.column));
    let by_header = match rest_frame_stated(&f.table.keywords) {
        Ok(v) => v,
        Err(why) => {
            f.problems.push(why);
            None
        }
    };
    match (by_name, by_header) {
        (Some(a), Some(b)) if a != b => {
            f.problems.push(format!(
                "the redshift column '{}' is named for the {} frame but the header's SPECSYS \
                 says {}; give --z-frame to say which",
                z.map(|r| r.column.as_str()).unwrap_or_default(),
                a.name(),
                b.name()
            ));
            a
        }
        (Some(a), _) => a,
        (None, Some(b)) => b,
        (None, None) => GivenFrame::Helio,
    }
}

fn resolve_redshift_part(f: &mut Finder<'_>, choice: &ColumnChoice) -> Option<RedshiftColumns> {
    let sky_frame = sky_frame_of(f, choice);
    let (lon_names, lon_ucds) = sky_defaults(sky_frame);
    let [lon_role, lat_role] = if sky_frame.is_equatorial() {
        ["right-ascension", "declination"]
    } else {
        ["longitude", "latitude"]
    };
    let ra = f.required(lon_role, &choice.ra, &[lon_names[0]], &|w| {
        w.iter().any(|x| x == lon_ucds[0])
    });
    let dec = f.required(lat_role, &choice.dec, &[lon_names[1]], &|w| {
        w.iter().any(|x| x == lon_ucds[1])
    });
    let z_all = all_z_defaults();
    let z_all: Vec<&str> = match choice.z_frame {
        // A frame given: its names only.
        Some(frame) => z_all
            .iter()
            .map(String::as_str)
            .filter(|n| z_defaults(frame).iter().any(|d| d == n))
            .collect(),
        None => z_all.iter().map(String::as_str).collect(),
    };
    let z = f.required("redshift", &choice.z, &z_all, &|w| {
        w.iter().any(|x| x == "src.redshift") && !is_error(w)
    });
    let z_frame = z_frame_of(f, choice, z.as_ref());
    let z_names = z_defaults(z_frame);

    // Redshift unit: the flag, checked against the unit card; else the card; else the name.
    let z_card = z.as_ref().and_then(|r| unit_of(f.table, &r.column));
    let z_unit = match (&choice.z_unit, &z, &z_card) {
        (Some(RedshiftUnit::Z), Some(r), Some(Unit::KmPerS)) => {
            f.problems.push(format!(
                "the redshift column '{}' has unit 'km/s' (c·z) in the file, but --z-unit z says it holds z; drop --z-unit or give --z-unit cz",
                r.column
            ));
            RedshiftUnit::Z
        }
        (Some(u), ..) => *u,
        (None, _, Some(Unit::KmPerS)) => RedshiftUnit::Cz,
        (None, Some(r), _) if r.column.eq_ignore_ascii_case(&z_names[1]) => RedshiftUnit::Cz,
        _ => RedshiftUnit::Z,
    };
    let z_err_defaults: Vec<String> = match &z {
        Some(r) => vec![
            format!("{}_err", r.column),
            if z_unit == RedshiftUnit::Cz {
                "cz_err".into()
            } else {
                "z_err".into()
            },
        ],
        None => vec!["z_err".into()],
    };
    let defaults: Vec<&str> = z_err_defaults.iter().map(String::as_str).collect();
    let z_err = f.optional("redshift-error", &choice.z_err, &defaults, &|w| {
        w.iter().any(|x| x == "src.redshift") && is_error(w)
    });

    // Angle unit: the flag, checked against the card of RA; else the card.
    let ra_card = ra.as_ref().and_then(|r| unit_of(f.table, &r.column));
    let angle_unit = match (choice.angle_unit, &ra_card) {
        (Some(AngleUnit::Deg), Some(Unit::Rad)) | (Some(AngleUnit::Rad), Some(Unit::Deg)) => {
            f.problems.push(format!(
                "the right-ascension column '{}' has unit '{}' in the file, which --angle-unit contradicts; drop --angle-unit or correct it",
                ra.as_ref().map(|r| r.column.as_str()).unwrap_or("?"),
                ra_card.as_ref().map(Unit::label).unwrap_or("")
            ));
            choice.angle_unit
        }
        (Some(u), _) => Some(u),
        (None, Some(Unit::Rad)) => Some(AngleUnit::Rad),
        (None, Some(Unit::Deg)) => Some(AngleUnit::Deg),
        _ => None,
    };
    Some(RedshiftColumns {
        ra: ra?,
        dec: dec?,
        z: z?,
        z_unit,
        z_err,
        angle_unit,
        sky_frame,
        z_frame,
    })
}

fn report(f: &Finder<'_>) -> Result<(), ColumnError> {
    if f.problems.is_empty() {
        Ok(())
    } else {
        Err(ColumnError::Problems {
            problems: f.problems.clone(),
            columns: f.names.clone(),
        })
    }
}

/// Resolve positions and redshifts only (for `correct`, which needs no distance).
pub fn resolve_redshift_columns(
    table: &Table,
    choice: &ColumnChoice,
) -> Result<RedshiftColumns, ColumnError> {
    let mut f = Finder::new(table);
    let r = resolve_redshift_part(&mut f, choice);
    report(&f)?;
    r.ok_or(ColumnError::Unresolved("the columns could not be resolved"))
}

/// What a distance kind's column must hold, for messages.
fn kind_words(kind: DistanceKind) -> &'static str {
    match kind {
        DistanceKind::Mu => "a distance modulus in mag",
        DistanceKind::Dl => "a luminosity distance in Mpc",
        DistanceKind::Da => "an angular-diameter distance in Mpc",
        DistanceKind::Dc => "a comoving distance in Mpc",
        DistanceKind::Eta => "a log-distance ratio (no unit)",
        #[allow(unreachable_patterns)]
        _ => "a distance",
    }
}

/// Does what the file says of a column (its unit card and UCD) contradict `kind`?
fn kind_conflict(table: &Table, column: &str, kind: DistanceKind) -> Option<String> {
    let unit = unit_of(table, column);
    let distmod = ucd_of(table, column)
        .map(|u| ucd_words(&u).iter().any(|w| w == "phot.mag.distmod"))
        .unwrap_or(false);
    let fits = match (&unit, kind) {
        (Some(Unit::Mag), DistanceKind::Mu) => true,
        (Some(Unit::Mag), _) => false,
        (Some(u), DistanceKind::Mu) if u.is_length() || *u == Unit::KmPerS => false,
        (Some(u), DistanceKind::Eta) if u.is_length() || *u == Unit::KmPerS => false,
        (Some(Unit::KmPerS), _) => false,
        _ => true,
    };
    if !fits {
        return Some(format!(
            "the distance column '{column}' has unit '{}' in the file, but it is read as {} ({DISTANCE_KIND_FLAG} or its default); give the kind that matches the unit",
            unit.as_ref().map(Unit::label).unwrap_or(""),
            kind_words(kind)
        ));
    }
    if distmod && kind != DistanceKind::Mu {
        return Some(format!(
            "the distance column '{column}' has UCD phot.mag.distMod (a distance modulus), but it is read as {} ({DISTANCE_KIND_FLAG}); give --distance-kind mu",
            kind_words(kind)
        ));
    }
    None
}

/// The kind a column's unit card or UCD says it holds, where that is unambiguous.
fn kind_from_file(table: &Table, column: &str) -> Option<DistanceKind> {
    let distmod = ucd_of(table, column)
        .map(|u| ucd_words(&u).iter().any(|w| w == "phot.mag.distmod"))
        .unwrap_or(false);
    match unit_of(table, column) {
        Some(Unit::Mag) => Some(DistanceKind::Mu),
        _ if distmod => Some(DistanceKind::Mu),
        _ => None,
    }
}

/// Resolve the mapping. `length_unit` is the user's choice (flag/run file), if any.
pub fn resolve_columns(
    table: &Table,
    choice: &ColumnChoice,
    length_unit: Option<LengthUnit>,
) -> Result<ColumnPlan, ColumnError> {
    let mut f = Finder::new(table);
    let sky = resolve_redshift_part(&mut f, choice);

    // Distance: exactly one.
    let kinds = [
        DistanceKind::Mu,
        DistanceKind::Dl,
        DistanceKind::Dc,
        DistanceKind::Eta,
        DistanceKind::Da,
    ];
    let (distance, distance_kind) = match &choice.distance {
        Some(g) => match f.named("distance", g) {
            Some(r) => {
                let kind = choice
                    .distance_kind
                    .or_else(|| {
                        kinds
                            .iter()
                            .copied()
                            .find(|k| r.column.eq_ignore_ascii_case(k.name()))
                    })
                    .or_else(|| kind_from_file(table, &r.column));
                match kind {
                    Some(k) => (Some(r), Some(k)),
                    None => {
                        f.problems.push(format!(
                            "say what the distance column '{}' holds with --distance-kind mu|dl|dc|da|eta",
                            r.column
                        ));
                        (None, None)
                    }
                }
            }
            None => (None, None),
        },
        None => {
            let present: Vec<(String, DistanceKind)> = kinds
                .iter()
                .filter_map(|k| find_name(&f.names, k.name()).map(|c| (c, *k)))
                .collect();
            match present.len() {
                1 => {
                    let (c, k) = present[0].clone();
                    (
                        Some(Resolved {
                            column: c,
                            found_by: "default name".into(),
                        }),
                        Some(choice.distance_kind.unwrap_or(k)),
                    )
                }
                0 => match f.by_ucd(&|w| w.iter().any(|x| x == "phot.mag.distmod") && !is_error(w))
                {
                    Some(r) => (
                        Some(r),
                        Some(choice.distance_kind.unwrap_or(DistanceKind::Mu)),
                    ),
                    None => {
                        f.problems.push("no distance column: expected one named mu, dl, dc, da or eta (or --distance-column with --distance-kind)".into());
                        (None, None)
                    }
                },
                _ => {
                    let found: Vec<_> = present.iter().map(|p| p.0.clone()).collect();
                    f.problems.push(format!(
                        "several distance columns ({}): choose one with --distance-column",
                        found.join(", ")
                    ));
                    (None, None)
                }
            }
        }
    };
    if let (Some(d), Some(k)) = (&distance, distance_kind) {
        if let Some(p) = kind_conflict(table, &d.column, k) {
            f.problems.push(p);
        }
    }

    // The distance error: `<distance>_err` by name, else the one column whose UCD is the
    // error of the distance's own UCD (e.g. stat.error;phot.mag.distMod).
    let distance_err = match &distance {
        Some(d) => {
            let own: Vec<String> = ucd_of(table, &d.column)
                .map(|u| ucd_words(&u))
                .unwrap_or_default()
                .into_iter()
                .filter(|w| !w.starts_with("stat.") && !w.starts_with("meta."))
                .collect();
            let own = if own.is_empty() && distance_kind == Some(DistanceKind::Mu) {
                vec!["phot.mag.distmod".to_string()]
            } else {
                own
            };
            let default = format!("{}_err", d.column);
            f.optional("distance-error", &choice.distance_err, &[&default], &|w| {
                is_error(w) && !own.is_empty() && own.iter().all(|o| w.contains(o))
            })
        }
        None => None,
    };
    let group_id = f.optional("group", &choice.group_id, &["group_id"], &|_| false);

    // Length unit: the flag, checked against the unit card of a dl/dc column; else the card.
    let card = match (&distance, distance_kind) {
        (Some(d), Some(DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da)) => {
            unit_of(table, &d.column)
        }
        _ => None,
    };
    let from_card = match card {
        Some(Unit::Mpc) => Some(LengthUnit::Mpc),
        Some(Unit::MpcOverH) => Some(LengthUnit::MpcOverH),
        _ => None,
    };
    let length_unit = match (length_unit, from_card) {
        (Some(u), Some(c)) if u != c => {
            f.problems.push(format!(
                "the distance column '{}' has unit '{}' in the file, but --length-unit says {}; drop --length-unit or correct it",
                distance.as_ref().map(|d| d.column.as_str()).unwrap_or("?"),
                c.label(),
                u.label()
            ));
            u
        }
        (Some(u), _) => u,
        (None, Some(c)) => c,
        (None, None) => LengthUnit::Mpc,
    };

    report(&f)?;
    let sky = sky.ok_or(ColumnError::Unresolved("the columns could not be resolved"))?;
    Ok(ColumnPlan {
        ra: sky.ra,
        dec: sky.dec,
        z: sky.z,
        z_unit: sky.z_unit,
        z_err: sky.z_err,
        distance: distance.ok_or(ColumnError::Unresolved("no distance column"))?,
        distance_kind: distance_kind.ok_or(ColumnError::Unresolved("no distance kind"))?,
        distance_err,
        group_id,
        angle_unit: sky.angle_unit,
        length_unit,
        sky_frame: sky.sky_frame,
        z_frame: sky.z_frame,
    })
}
