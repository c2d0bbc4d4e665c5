//! One `correct` run: a catalogue with positions and redshifts in, the same rows out with the
//! model velocity at each object's self-consistent position, the cosmological redshift with
//! the predicted peculiar velocity removed, and the uncertainties that removal leaves.

use std::path::PathBuf;

use polars::prelude::*;
use rayon::prelude::*;
use serde::Serialize;

use crate::catalogue::column_schema::meta_of;
use crate::catalogue::{read_table, ReadOptions, Table, WriteOptions};
use crate::flow::line_of_sight::{correct_object, LineOfSight, SearchSettings};
use crate::physics::constants::C_KM_S;
use crate::physics::cosmology::LengthUnit;
use crate::physics::field::FieldAxes;
use crate::physics::redshift::{Heliocentric, Redshift};
use crate::physics::restframe::{legacy_additive, BoostMethod};
use crate::physics::sky::{Direction, Icrs, SkyRotations};
use crate::pipeline::inputs::{check_redshift_unit, longitude_reading, read_numbers, Reading};
use crate::pipeline::RowStatus;
use crate::plan::columns::resolve_redshift_columns;
use crate::plan::CorrectPlan;
use crate::settings::RedshiftUnit;

use super::model::build_model;
use super::{cosmology_reaching, RunError};

/// What a `correct` run did.
#[derive(Debug, Clone, Serialize)]
pub struct CorrectSummary {
    pub rows: usize,
    #[serde(serialize_with = "super::counts_as_object")]
    pub counts: Vec<(String, usize)>,
    pub output: PathBuf,
    pub cautions: Vec<String>,
}

/// Run `correct` as `plan` says.
pub fn run_correct(plan: &CorrectPlan) -> Result<CorrectSummary, super::RunError> {
    let shared = &plan.shared;
    let resolved = &shared.cosmology;
    let frames = &shared.frames;
    let (model, model_description) = build_model(&plan.model, &resolved.params)?.ok_or(
        "give a velocity model: --field FILE, --uniform-flow VX,VY,VZ, --infall … or --external VX,VY,VZ",
    )?;
    let options = ReadOptions {
        hdu: plan.config().input.hdu.clone(),
    };
    // A delimited output copies the input's columns from its text when it can.
    let (table, source_text) = if matches!(
        crate::catalogue::Format::from_path(&plan.output),
        Ok(crate::catalogue::Format::Csv | crate::catalogue::Format::Tsv)
    ) {
        crate::catalogue::read_table_keeping_text(&plan.input, &options)
            .map_err(|e| e.to_string())?
    } else {
        (
            read_table(&plan.input, &options).map_err(|e| e.to_string())?,
            None,
        )
    };
    let where_ = |e: RunError| RunError::in_file(&plan.input, e);
    let columns =
        resolve_redshift_columns(&table, &plan.config().columns).map_err(|e| where_(e.into()))?;
    let (mut ra, ra_code) = read_numbers(
        &table,
        &columns.ra.column,
        longitude_reading(columns.sky_frame, columns.angle_unit),
    )
    .map_err(|e| where_(e.into()))?;
    let (mut dec, dec_code) = read_numbers(
        &table,
        &columns.dec.column,
        Reading::Dec(columns.angle_unit),
    )
    .map_err(|e| where_(e.into()))?;
    let (mut z, z_code) =
        read_numbers(&table, &columns.z.column, Reading::Number).map_err(|e| where_(e.into()))?;
    check_redshift_unit(&z, &columns.z.column, columns.z_unit).map_err(|e| where_(e.into()))?;
    let (mut z_err, _) = match &columns.z_err {
        Some(c) => {
            read_numbers(&table, &c.column, Reading::Number).map_err(|e| where_(e.into()))?
        }
        None => (vec![0.0; z.len()].into(), vec![0; z.len()]),
    };
    if columns.z_unit == RedshiftUnit::Cz {
        z.to_mut().iter_mut().for_each(|x| *x /= C_KM_S);
        z_err.to_mut().iter_mut().for_each(|x| *x /= C_KM_S);
    }
    // A row whose position or redshift is missing or unreadable is `bad_input`.
    let mut status: Vec<u8> = (0..z.len())
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
    let (given_z_helio, frame_notes) = super::given_frames::to_icrs_and_heliocentric(
        super::given_frames::GivenColumns {
            lon: ra.to_mut(),
            lat: dec.to_mut(),
            z: z.to_mut(),
            z_err: z_err.to_mut(),
            status: &mut status,
        },
        super::given_frames::GivenIn {
            sky_frame: columns.sky_frame,
            z_frame: columns.z_frame,
            z_column: &columns.z.column,
        },
        shared,
    )
    .map_err(where_)?;
    let z_top = z
        .iter()
        .zip(&status)
        .filter(|(x, s)| x.is_finite() && **s == RowStatus::Ok as u8)
        .map(|(x, _)| *x)
        .fold(0.0, f64::max);
    let cosmology = cosmology_reaching(resolved.params, z_top)?;
    let convention = shared.convention;

    let model = &model;
    let rot = SkyRotations::default();
    let model_unit = model.length_unit().unwrap_or(LengthUnit::Mpc);
    let model_axes = model.axes().unwrap_or(FieldAxes::Supergalactic);
    let length_per_mpc = match model_unit {
        LengthUnit::Mpc => 1.0,
        LengthUnit::MpcOverH => resolved.params.little_h(),
    };
    // Scan finer than the model varies: half a grid cell, a quarter of the smallest infall
    // scale, or 1 Mpc.
    let step = model
        .grid
        .as_ref()
        .map(|g| 0.5 * g.spacing)
        .into_iter()
        .chain(
            model
                .analytic
                .iter()
                .flat_map(|a| a.centres.iter().map(|c| 0.25 * c.r_scale)),
        )
        .fold(length_per_mpc, f64::min);
    let settings = SearchSettings {
        step,
        length_per_mpc,
        convention,
    };
    let n = z.len();
    let results: Vec<Option<(crate::flow::line_of_sight::Correction, f64)>> = (0..n)
        .into_par_iter()
        .map(|i| {
            if status[i] != RowStatus::Ok as u8 {
                return None;
            }
            let icrs = Direction::<Icrs>::from_lon_lat_deg(ra[i], dec[i]).ok()?;
            let gal = rot.icrs_to_galactic.apply(&icrs);
            let zh = Redshift::<Heliocentric>::new(z[i]).ok()?;
            let z_cmb = match frames.method {
                BoostMethod::Exact => frames.cmb.from_heliocentric(zh, &gal),
                BoostMethod::LegacyAdditive => legacy_additive(&frames.cmb, zh, &gal).ok()?,
            };
            let n_hat = match model_axes {
                FieldAxes::Galactic => gal.xyz(),
                FieldAxes::Supergalactic => rot.galactic_to_supergalactic.apply(&gal).xyz(),
            };
            let radial = |r: f64| {
                model
                    .velocity([n_hat[0] * r, n_hat[1] * r, n_hat[2] * r])
                    .map(|v| v[0] * n_hat[0] + v[1] * n_hat[1] + v[2] * n_hat[2])
            };
            let k = z_cmb.one_plus() / zh.one_plus();
            let los = LineOfSight {
                radial_velocity: &radial,
                z_cmb: z_cmb.value(),
                z_helio: zh.value(),
                z_err: if z_err[i].is_finite() {
                    z_err[i] * k
                } else {
                    0.0
                },
                sigma_v: model.sigma_v,
            };
            Some((correct_object(&cosmology, &los, &settings), z_cmb.value()))
        })
        .collect();
    let flags: Vec<&str> = results
        .iter()
        .map(|r| r.map(|(c, _)| c.flag.name()).unwrap_or("bad_input"))
        .collect();
    let col = |f: fn(&crate::flow::line_of_sight::Correction) -> f64| -> Vec<Option<f64>> {
        results
            .iter()
            .map(|r| r.as_ref().map(|(c, _)| f(c)).filter(|v| v.is_finite()))
            .collect()
    };
    let new = [
        ("v_model", col(|c| c.v_model)),
        ("z_cos_model", col(|c| c.z_cos_model)),
        ("z_cos_model_err", col(|c| c.z_cos_model_err)),
        ("mu_err_z_cos", col(|c| c.mu_err_z_cos)),
        ("field_distance", col(|c| c.r)),
    ];
    let mut frame = table.frame.clone();
    let mut meta = table.meta.clone();
    let mut cols = vec![];
    for (name, values) in new {
        if frame.column(name).is_ok() {
            frame = frame.drop(name).map_err(|e| e.to_string())?;
        }
        cols.push(Column::new(name.into(), values));
        meta.insert(name.into(), meta_of(name, model_unit.label()));
    }
    // The CMB-frame redshift the correction started from; an input column of that name is
    // kept as `z_cmb_input`.
    let mut z_cmb_note = None;
    if frame.column("z_cmb").is_ok() {
        if frame.column("z_cmb_input").is_ok() {
            frame = frame.drop("z_cmb").map_err(|e| e.to_string())?;
            z_cmb_note = Some(
                "The input's z_cmb column was replaced (z_cmb_input, from an earlier run, is kept).",
            );
        } else {
            frame
                .rename("z_cmb", "z_cmb_input".into())
                .map_err(|e| e.to_string())?;
            if let Some(m) = meta.remove("z_cmb") {
                meta.insert("z_cmb_input".into(), m);
            }
            z_cmb_note = Some("The input's z_cmb column is kept as z_cmb_input.");
        }
    }
    let z_cmb: Vec<Option<f64>> = results
        .iter()
        .map(|r| r.as_ref().map(|(_, z)| *z).filter(|v| v.is_finite()))
        .collect();
    cols.push(Column::new("z_cmb".into(), z_cmb));
    meta.insert("z_cmb".into(), meta_of("z_cmb", ""));
    if let Some(z_helio) = given_z_helio {
        // The input gave another frame: the heliocentric redshift derived from it.
        if frame.column("z_helio").is_ok() {
            frame = frame.drop("z_helio").map_err(|e| e.to_string())?;
        }
        let values: Vec<Option<f64>> = z_helio
            .iter()
            .map(|z| Some(*z).filter(|z| z.is_finite()))
            .collect();
        cols.push(Column::new("z_helio".into(), values));
        meta.insert("z_helio".into(), meta_of("z_helio", ""));
    }
    if frame.column("field_flag").is_ok() {
        frame = frame.drop("field_flag").map_err(|e| e.to_string())?;
    }
    cols.push(Column::new("field_flag".into(), flags.clone()));
    meta.insert("field_flag".into(), meta_of("field_flag", ""));
    let frame = frame.hstack(&cols).map_err(|e| e.to_string())?;
    let out = Table::new(frame, meta);
    let mut cautions = shared.cautions();
    cautions.extend(table.notes.iter().cloned());
    cautions.extend(frame_notes);
    cautions.extend(z_cmb_note.map(String::from));
    cautions.extend(crate::catalogue::atomic::leftovers_note(&plan.output));
    cautions.extend(crate::catalogue::left_out_note(&plan.output, &out));
    cautions.extend([
        format!("Velocity model: {model_description}."),
        format!(
            "z_cos_model removes the model's radial velocity at the self-consistent position by exact composition; z_cos_model_err includes σ_v = {} km/s and the redshift error; mu_err_z_cos is the distance-modulus error it implies ({} convention).",
            model.sigma_v,
            convention.name()
        ),
    ]);
    let inputs = plan.inputs();
    let input_refs: Vec<(&str, &std::path::Path)> =
        inputs.iter().map(|(r, p)| (*r, p.as_path())).collect();
    let mut record = shared.record("correct", &plan.command_line, &input_refs);
    record.settings.input = plan.config().input.clone();
    record.settings.columns = crate::settings::ColumnChoice {
        ra: Some(columns.ra.column.clone()),
        dec: Some(columns.dec.column.clone()),
        z: Some(columns.z.column.clone()),
        z_unit: Some(columns.z_unit),
        z_err: columns.z_err.as_ref().map(|r| r.column.clone()),
        angle_unit: columns.angle_unit,
        sky_frame: Some(columns.sky_frame),
        z_frame: Some(columns.z_frame),
        ..Default::default()
    };
    record.details.insert(
        "frames".into(),
        super::given_frames::frames_detail(super::given_frames::GivenIn {
            sky_frame: columns.sky_frame,
            z_frame: columns.z_frame,
            z_column: &columns.z.column,
        }),
    );
    record
        .details
        .insert("model".into(), model_description.clone());
    record.details.insert(
        "model_settings".into(),
        serde_json::to_string(&plan.model).unwrap_or_default(),
    );
    record.cautions = cautions.clone();
    let provenance = record.to_provenance();
    crate::catalogue::write_table_with_text(
        &plan.output,
        &out,
        &provenance,
        &WriteOptions {
            force: plan.force,
            protected: inputs.iter().map(|(_, p)| p.clone()).collect(),
        },
        source_text.as_ref(),
    )
    .map_err(|e| e.to_string())?;
    let mut counts: Vec<(String, usize)> = [
        "ok",
        "outside_grid",
        "multiple_solutions",
        "no_solution",
        "bad_input",
    ]
    .iter()
    .map(|f| (f.to_string(), flags.iter().filter(|x| *x == f).count()))
    .collect();
    counts.retain(|c| c.1 > 0 || c.0 == "ok");
    Ok(CorrectSummary {
        rows: n,
        counts,
        output: plan.output.clone(),
        cautions,
    })
}
