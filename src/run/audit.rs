//! One `audit` run: read the catalogue, find its inputs (positions, heliocentric redshift,
//! a distance) by the rules every command uses and its derived columns (by name, UCD or
//! `--check`), recompute each derived column under every candidate convention
//! (`crate::audit`), and write the flagged copy when asked. Never prints.

use polars::prelude::*;
use schemars::JsonSchema;
use serde::Serialize;

use crate::audit::quantity::{discover, ColumnInfo, Quantity};
use crate::audit::{candidates_for, judge, AuditInputs, ColumnAudit, DistanceInput, RowVerdict};
use crate::catalogue::column_schema::{audit_residual_meta, meta_of};
use crate::catalogue::{read_table, ReadOptions, Table, WriteOptions};
use crate::physics::constants::C_KM_S;
use crate::physics::restframe::{cmb_dipoles, Apex, GivenFrame};
use crate::physics::sky::{Direction, Icrs, SkyRotations};
use crate::pipeline::inputs::{check_redshift_unit, longitude_reading, read_numbers, Reading};
use crate::pipeline::RowStatus;
use crate::plan::columns::{resolve_columns, resolve_redshift_columns};
use crate::plan::AuditPlan;
use crate::settings::RedshiftUnit;

use super::{cosmology_reaching, RunError};

/// What an audit found: one entry per audited column.
#[derive(Debug, Clone, Serialize, JsonSchema)]
pub struct AuditReport {
    pub input: String,
    /// Rows in the catalogue.
    pub rows: usize,
    /// The inputs the recomputations start from, role ← column.
    pub inputs: Vec<String>,
    pub columns: Vec<ColumnAudit>,
    /// Derived columns found but not audited, with the reason.
    pub skipped: Vec<String>,
    /// A match is evidence, not proof.
    pub caution: String,
    pub cautions: Vec<String>,
    /// The flagged catalogue, when written.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub output: Option<String>,
}

fn without(table: &Table, drop: &[&str]) -> Result<Table, RunError> {
    let mut t = table.clone();
    for d in drop {
        if t.frame.column(d).is_ok() {
            t.frame = t.frame.drop(d).map_err(|e| e.to_string())?;
        }
    }
    Ok(t)
}

/// Run `audit` as `plan` says.
pub fn run_audit(plan: &AuditPlan) -> Result<AuditReport, RunError> {
    let shared = &plan.shared;
    let config = plan.config();
    let table = read_table(
        &plan.input,
        &ReadOptions {
            hdu: config.input.hdu.clone(),
        },
    )
    .map_err(|e| e.to_string())?;
    let where_ = |e: RunError| RunError::in_file(&plan.input, e);
    let n = table.frame.height();

    // Inputs: positions and the heliocentric redshift.
    let sky = resolve_redshift_columns(&table, &config.columns).map_err(|e| where_(e.into()))?;
    if sky.z_frame != GivenFrame::Helio {
        return Err(where_(RunError::Failed(format!(
            "the redshift column '{}' is in the {} frame; an audit recomputes derived columns from heliocentric redshifts (give the heliocentric column with --z-column)",
            sky.z.column,
            sky.z_frame.name()
        ))));
    }
    let mut input_names: Vec<String> = vec![
        sky.ra.column.clone(),
        sky.dec.column.clone(),
        sky.z.column.clone(),
    ];
    input_names.extend(sky.z_err.iter().map(|r| r.column.clone()));
    if let Some(d) = &config.columns.distance {
        input_names.push(d.clone());
    }

    // Derived columns: named by --check, then found by name or UCD.
    let names: Vec<String> = table
        .frame
        .get_column_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let mut audited: Vec<(String, Quantity)> = vec![];
    let mut skipped = vec![];
    for (c, q) in &plan.checks {
        let Some(found) = crate::plan::columns::find_name(&names, c) else {
            return Err(where_(RunError::Failed(format!(
                "--check: no column '{c}'; columns in the file: {}",
                names.join(", ")
            ))));
        };
        audited.push((found, *q));
    }
    if plan.discover {
        let infos: Vec<ColumnInfo<'_>> = names
            .iter()
            .map(|n| ColumnInfo {
                name: n,
                ucd: table.meta.get(n).and_then(|m| m.ucd.as_deref()),
            })
            .collect();
        let refs: Vec<&str> = input_names.iter().map(String::as_str).collect();
        for (c, q) in discover(&infos, &refs) {
            if !audited.iter().any(|(a, _)| *a == c) {
                audited.push((c, q));
            }
        }
    }

    // The distance input: by the flags and default names, else with the derived columns
    // (those that are not distances first) set aside.
    let derived_not_distance: Vec<&str> = audited
        .iter()
        .filter(|(_, q)| *q != Quantity::Distance)
        .map(|(c, _)| c.as_str())
        .collect();
    let all_derived: Vec<&str> = audited.iter().map(|(c, _)| c.as_str()).collect();
    let mut distance_plan = resolve_columns(&table, &config.columns, None).ok();
    for drop in [&derived_not_distance, &all_derived] {
        if distance_plan.is_none() {
            distance_plan = resolve_columns(&without(&table, drop)?, &config.columns, None).ok();
        }
    }
    if config.columns.distance.is_some() && distance_plan.is_none() {
        // Named by the user: say why it does not resolve.
        resolve_columns(&table, &config.columns, None).map_err(|e| where_(e.into()))?;
    }
    if let Some(p) = &distance_plan {
        audited.retain(|(c, _)| *c != p.distance.column);
    }

    // Read the inputs.
    let (mut ra, ra_code) = read_numbers(
        &table,
        &sky.ra.column,
        longitude_reading(sky.sky_frame, sky.angle_unit),
    )
    .map_err(|e| where_(e.into()))?;
    let (mut dec, dec_code) = read_numbers(&table, &sky.dec.column, Reading::Dec(sky.angle_unit))
        .map_err(|e| where_(e.into()))?;
    let (mut z, z_code) =
        read_numbers(&table, &sky.z.column, Reading::Number).map_err(|e| where_(e.into()))?;
    check_redshift_unit(&z, &sky.z.column, sky.z_unit).map_err(|e| where_(e.into()))?;
    if sky.z_unit == RedshiftUnit::Cz {
        z.to_mut().iter_mut().for_each(|x| *x /= C_KM_S);
    }
    let mut status: Vec<u8> = (0..n)
        .map(|i| {
            if ra_code[i] != 0 || dec_code[i] != 0 {
                RowStatus::MissingPosition as u8
            } else if z_code[i] != 0 {
                RowStatus::MissingRedshift as u8
            } else {
                RowStatus::Ok as u8
            }
        })
        .collect();
    let mut z_err = vec![0.0; n];
    let (_, mut frame_notes) = super::given_frames::to_icrs_and_heliocentric(
        super::given_frames::GivenColumns {
            lon: ra.to_mut(),
            lat: dec.to_mut(),
            z: z.to_mut(),
            z_err: &mut z_err,
            status: &mut status,
        },
        super::given_frames::GivenIn {
            sky_frame: sky.sky_frame,
            z_frame: sky.z_frame,
            z_column: &sky.z.column,
        },
        shared,
    )
    .map_err(where_)?;
    let rot = SkyRotations::default();
    let directions: Vec<_> = (0..n)
        .map(|i| {
            (status[i] == RowStatus::Ok as u8)
                .then(|| Direction::<Icrs>::from_lon_lat_deg(ra[i], dec[i]).ok())
                .flatten()
                .map(|d| rot.icrs_to_galactic.apply(&d))
        })
        .collect();
    let z_helio: Vec<f64> = (0..n)
        .map(|i| {
            if status[i] == RowStatus::Ok as u8 && z[i] > -1.0 {
                z[i]
            } else {
                f64::NAN
            }
        })
        .collect();
    let distance_values = match &distance_plan {
        Some(p) => Some((
            p.distance_kind,
            read_numbers(&table, &p.distance.column, Reading::Number)
                .map_err(|e| where_(e.into()))?
                .0
                .into_owned(),
        )),
        None => None,
    };
    let z_top = z_helio
        .iter()
        .filter(|x| x.is_finite())
        .fold(0.0f64, |a, b| a.max(*b));
    let cosmology = cosmology_reaching(shared.cosmology.params, z_top + 0.05)?;

    // Apices: the run's own first, then the built-in dipoles and the user's own.
    let frames = &shared.frames;
    let mut cmb_apices: Vec<Apex> = vec![frames.cmb_apex.clone()];
    let mut lg_apices: Vec<Apex> = vec![frames.local_group_apex.clone()];
    for a in cmb_dipoles()
        .into_iter()
        .chain(frames.own_apices.iter().cloned())
    {
        let list = match a.frame {
            "cmb" => &mut cmb_apices,
            "local-group" => &mut lg_apices,
            _ => continue,
        };
        if !list.iter().any(|b| b.name == a.name) {
            list.push(a);
        }
    }
    let inputs = AuditInputs {
        directions: &directions,
        z_helio: &z_helio,
        distance: distance_values.as_ref().map(|(kind, v)| DistanceInput {
            kind: *kind,
            values: v,
        }),
        cosmology: &cosmology,
        cmb_apices: &cmb_apices,
        lg_apices: &lg_apices,
    };

    let mut columns = vec![];
    let mut residual_columns = vec![];
    let mut verdicts_by_column: Vec<(String, Vec<RowVerdict>)> = vec![];
    for (column, quantity) in &audited {
        if quantity.needs_distance() && inputs.distance.is_none() {
            let why = format!(
                "{column} ({}): needs a distance input (--distance-column with --distance-kind)",
                quantity.name()
            );
            if plan
                .checks
                .iter()
                .any(|(c, _)| c.eq_ignore_ascii_case(column))
            {
                return Err(where_(RunError::Failed(why)));
            }
            skipped.push(why);
            continue;
        }
        let (target, _) =
            read_numbers(&table, column, Reading::Number).map_err(|e| where_(e.into()))?;
        let target: Vec<f64> = target.into_owned();
        let cands = candidates_for(*quantity, &inputs, &target)
            .map_err(|e| where_(RunError::Failed(format!("{column}: {e}"))))?;
        let (audit, residuals, verdicts) = judge(column, *quantity, &target, &cands, None)
            .map_err(|e| where_(RunError::Failed(e)))?;
        let unit = match quantity {
            Quantity::Distance => table
                .meta
                .get(column)
                .and_then(|m| m.unit.clone())
                .unwrap_or_default(),
            q => q.unit().to_string(),
        };
        residual_columns.push((
            format!("audit_{column}"),
            residuals,
            audit_residual_meta(column, &unit, &audit.best_label),
        ));
        verdicts_by_column.push((column.clone(), verdicts));
        columns.push(audit);
    }
    if columns.is_empty() {
        skipped.push(
            "no derived column found to audit (name one with --check COLUMN:QUANTITY)".into(),
        );
    }

    let mut inputs_lines = vec![
        format!(
            "position ← {}, {} ({})",
            sky.ra.column,
            sky.dec.column,
            sky.sky_frame.name()
        ),
        format!(
            "z_helio ← {} ({})",
            sky.z.column,
            if sky.z_unit == RedshiftUnit::Cz {
                "cz in km/s"
            } else {
                "z"
            }
        ),
    ];
    if let Some(p) = &distance_plan {
        inputs_lines.push(format!(
            "distance ({}) ← {} ({})",
            p.distance_kind.name(),
            p.distance.column,
            p.distance.found_by
        ));
    }
    let mut cautions = vec![format!(
        "Composition and Watkins–Feldman candidates use the run's cosmology ({}); cz − H0·d and h⁻¹ Mpc distances fit H0 to the column.",
        shared.cosmology.source
    )];
    cautions.extend(table.notes.iter().cloned());
    cautions.append(&mut frame_notes);

    let mut output = None;
    if let Some(path) = &plan.output {
        let flags: Vec<String> = (0..n)
            .map(|i| {
                let mut parts = vec![];
                let mut any = false;
                for (c, v) in &verdicts_by_column {
                    match v[i] {
                        RowVerdict::Best => any = true,
                        RowVerdict::Other(_) => {
                            any = true;
                            parts.push(format!("{c}:other"))
                        }
                        RowVerdict::Unexplained => {
                            any = true;
                            parts.push(format!("{c}:unexplained"))
                        }
                        RowVerdict::NotAudited => {}
                    }
                }
                if !parts.is_empty() {
                    parts.join(";")
                } else if any {
                    "ok".into()
                } else {
                    "not_audited".into()
                }
            })
            .collect();
        let mut frame = table.frame.clone();
        let mut meta = table.meta.clone();
        let mut cols = vec![];
        for (name, values, m) in residual_columns {
            if frame.column(&name).is_ok() {
                frame = frame.drop(&name).map_err(|e| e.to_string())?;
            }
            let values: Vec<Option<f64>> = values
                .into_iter()
                .map(|v| v.is_finite().then_some(v))
                .collect();
            cols.push(Column::new(name.as_str().into(), values));
            meta.insert(name, m);
        }
        if frame.column("audit_flag").is_ok() {
            frame = frame.drop("audit_flag").map_err(|e| e.to_string())?;
        }
        cols.push(Column::new("audit_flag".into(), flags));
        meta.insert("audit_flag".into(), meta_of("audit_flag", ""));
        let frame = frame.hstack(&cols).map_err(|e| e.to_string())?;
        let out = Table::new(frame, meta);
        cautions.extend(crate::catalogue::atomic::leftovers_note(path));
        cautions.extend(crate::catalogue::left_out_note(path, &out));
        let mut record = shared.record("audit", &plan.command_line, &[("catalogue", &plan.input)]);
        record.settings.input = config.input.clone();
        record.details.insert(
            "audited".into(),
            columns
                .iter()
                .map(|c| format!("{} ({}): {}", c.column, c.quantity.name(), c.best_label))
                .collect::<Vec<_>>()
                .join("; "),
        );
        record.cautions = cautions.clone();
        record.cautions.push(crate::audit::CAUTION.into());
        crate::catalogue::write_table(
            path,
            &out,
            &record.to_provenance(),
            &WriteOptions {
                force: plan.force,
                protected: vec![plan.input.clone()],
            },
        )
        .map_err(|e| e.to_string())?;
        output = Some(path.display().to_string());
    }

    Ok(AuditReport {
        input: plan.input.display().to_string(),
        rows: n,
        inputs: inputs_lines,
        columns,
        skipped,
        caution: crate::audit::CAUTION.into(),
        cautions,
        output,
    })
}
