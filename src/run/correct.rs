//! One `correct` run: a catalogue with positions and redshifts in, the same rows out with the
//! model velocity at each object's self-consistent position, the cosmological redshift with
//! the predicted peculiar velocity removed, and the uncertainties that removal leaves.

use std::path::PathBuf;

use polars::prelude::*;
use rayon::prelude::*;
use serde::Serialize;

use crate::catalogue::{read_table, ColumnMeta, Provenance, ReadOptions, Table, WriteOptions};
use crate::flow::correct::{correct_object, LineOfSight, SearchSettings};
use crate::physics::constants::C_KM_S;
use crate::physics::cosmology::{Cosmology, LengthUnit};
use crate::physics::estimators::DlConvention;
use crate::physics::field::{FieldAxes, FlowModel};
use crate::physics::redshift::{Heliocentric, Redshift};
use crate::physics::restframe::{legacy_additive, BoostMethod};
use crate::physics::sky::{Direction, Icrs, SkyRotations};
use crate::pipeline::inputs::{read_numbers, Reading};
use crate::plan::columns::find_name;
use crate::settings::{AngleUnit, RedshiftUnit};
use crate::settings::{CosmologyChoice, FrameChoice};

/// What to correct, and with what.
pub struct CorrectRequest<'a> {
    pub input: PathBuf,
    pub output: PathBuf,
    pub force: bool,
    pub command_line: String,
    /// Column names (defaults: ra, dec, z_helio or cz_helio, z_err).
    pub ra: Option<String>,
    pub dec: Option<String>,
    pub z: Option<String>,
    pub z_unit: Option<RedshiftUnit>,
    pub z_err: Option<String>,
    pub angle_unit: Option<AngleUnit>,
    pub cosmology: CosmologyChoice,
    pub frame: FrameChoice,
    pub convention: DlConvention,
    pub model: &'a FlowModel,
    /// How the model was made, for provenance.
    pub model_description: String,
}

/// What a `correct` run did.
#[derive(Debug, Clone, Serialize)]
pub struct CorrectSummary {
    pub rows: usize,
    pub counts: Vec<(String, usize)>,
    pub output: PathBuf,
    pub cautions: Vec<String>,
}

fn column(
    names: &[String],
    given: &Option<String>,
    defaults: &[&str],
    role: &str,
) -> Result<String, String> {
    if let Some(g) = given {
        return find_name(names, g).ok_or_else(|| {
            format!(
                "the {role} column '{g}' is not in the file; columns: {}",
                names.join(", ")
            )
        });
    }
    defaults
        .iter()
        .find_map(|d| find_name(names, d))
        .ok_or_else(|| {
            format!(
                "no {role} column (expected {}); columns: {}",
                defaults.join(" or "),
                names.join(", ")
            )
        })
}

/// Run `correct`.
pub fn run_correct(req: &CorrectRequest<'_>) -> Result<CorrectSummary, String> {
    let resolved = req
        .cosmology
        .resolve()
        .map_err(|e| format!("cosmology: {e}"))?;
    let frames = req
        .frame
        .resolve()
        .map_err(|e| format!("rest frame: {e}"))?;
    if req.output.exists() && !req.force {
        return Err(format!(
            "{}: output exists; pass --force to replace it",
            req.output.display()
        ));
    }
    // A delimited output copies the input's columns from its text when it can.
    let delimited = |p: &std::path::Path| {
        matches!(
            crate::catalogue::Format::from_path(p),
            Ok(crate::catalogue::Format::Csv | crate::catalogue::Format::Tsv)
        )
    };
    let (table, source_text) = if delimited(&req.output) {
        crate::catalogue::read_table_keeping_text(&req.input, &ReadOptions::default())
            .map_err(|e| e.to_string())?
    } else {
        (
            read_table(&req.input, &ReadOptions::default()).map_err(|e| e.to_string())?,
            None,
        )
    };
    let names: Vec<String> = table
        .frame
        .get_column_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let where_ = |e: String| format!("{}: {e}", req.input.display());
    let ra_c = column(&names, &req.ra, &["ra"], "right-ascension").map_err(where_)?;
    let dec_c = column(&names, &req.dec, &["dec"], "declination").map_err(where_)?;
    let z_c = column(&names, &req.z, &["z_helio", "cz_helio"], "redshift").map_err(where_)?;
    let z_unit = req
        .z_unit
        .unwrap_or(if z_c.eq_ignore_ascii_case("cz_helio") {
            RedshiftUnit::Cz
        } else {
            RedshiftUnit::Z
        });
    let z_err_c = match &req.z_err {
        Some(_) => Some(column(&names, &req.z_err, &[], "redshift-error").map_err(where_)?),
        None => find_name(
            &names,
            if z_unit == RedshiftUnit::Cz {
                "cz_err"
            } else {
                "z_err"
            },
        ),
    };
    let (ra, ra_code) = read_numbers(&table, &ra_c, Reading::Ra(req.angle_unit)).map_err(where_)?;
    let (dec, dec_code) =
        read_numbers(&table, &dec_c, Reading::Dec(req.angle_unit)).map_err(where_)?;
    let (mut z, z_code) = read_numbers(&table, &z_c, Reading::Number).map_err(where_)?;
    let (mut z_err, _) = match &z_err_c {
        Some(c) => read_numbers(&table, c, Reading::Number).map_err(where_)?,
        None => (vec![0.0; z.len()].into(), vec![0; z.len()]),
    };
    if z_unit == RedshiftUnit::Cz {
        z.to_mut().iter_mut().for_each(|x| *x /= C_KM_S);
        z_err.to_mut().iter_mut().for_each(|x| *x /= C_KM_S);
    }
    let z_top = z
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .fold(0.0, f64::max);
    let cosmology = Cosmology::new(resolved.params).map_err(|e| e.to_string())?;
    cosmology
        .ensure_covers(((1.0 + z_top) * 1.05 - 1.0).min(cosmology.z_max()))
        .map_err(|e| format!("cosmology: {e}"))?;

    let model = req.model;
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
        convention: req.convention,
    };
    let n = z.len();
    let results: Vec<Option<crate::flow::correct::Correction>> = (0..n)
        .into_par_iter()
        .map(|i| {
            if ra_code[i] != 0 || dec_code[i] != 0 || z_code[i] != 0 {
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
            Some(correct_object(&cosmology, &los, &settings))
        })
        .collect();
    let flags: Vec<&str> = results
        .iter()
        .map(|r| r.map(|c| c.flag.name()).unwrap_or("bad_input"))
        .collect();
    let col = |f: fn(&crate::flow::correct::Correction) -> f64| -> Vec<Option<f64>> {
        results
            .iter()
            .map(|r| r.as_ref().map(f).filter(|v| v.is_finite()))
            .collect()
    };
    let new = [
        ("v_model", col(|c| c.v_model), "km/s", "phys.veloc"),
        ("z_cos_model", col(|c| c.z_cos_model), "", "src.redshift"),
        (
            "z_cos_model_err",
            col(|c| c.z_cos_model_err),
            "",
            "stat.error;src.redshift",
        ),
        (
            "mu_pec_err",
            col(|c| c.mu_pec_err),
            "mag",
            "stat.error;phot.mag.distMod",
        ),
        (
            "field_distance",
            col(|c| c.r),
            model_unit.label(),
            "pos.distance",
        ),
    ];
    let mut frame = table.frame.clone();
    let mut meta = table.meta.clone();
    let mut cols = vec![];
    for (name, values, unit, ucd) in new {
        if frame.column(name).is_ok() {
            frame = frame.drop(name).map_err(|e| e.to_string())?;
        }
        cols.push(Column::new(name.into(), values));
        meta.insert(
            name.into(),
            ColumnMeta {
                unit: (!unit.is_empty()).then(|| unit.to_string()),
                ucd: Some(ucd.into()),
            },
        );
    }
    if frame.column("field_flag").is_ok() {
        frame = frame.drop("field_flag").map_err(|e| e.to_string())?;
    }
    cols.push(Column::new("field_flag".into(), flags.clone()));
    meta.insert(
        "field_flag".into(),
        ColumnMeta {
            unit: None,
            ucd: Some("meta.code.qual".into()),
        },
    );
    let frame = frame.hstack(&cols).map_err(|e| e.to_string())?;
    let out = Table { frame, meta };
    let cautions = vec![
        format!("Velocity model: {}.", req.model_description),
        format!(
            "z_cos_model removes the model's radial velocity at the self-consistent position by exact composition; z_cos_model_err includes σ_v = {} km/s and the redshift error; mu_pec_err is the distance-modulus error it implies ({} convention).",
            model.sigma_v,
            req.convention.name()
        ),
        format!("Cosmology for positions: {}.", resolved.source),
    ];
    let provenance = Provenance {
        entries: vec![
            (
                "software".into(),
                format!("flowsift {}", env!("CARGO_PKG_VERSION")),
            ),
            ("command".into(), req.command_line.clone()),
            ("input".into(), req.input.display().to_string()),
            ("model".into(), req.model_description.clone()),
            (
                "cosmology".into(),
                serde_json::to_string(&resolved).unwrap_or_default(),
            ),
            (
                "cmb_apex".into(),
                serde_json::to_string(&frames.cmb_apex).unwrap_or_default(),
            ),
            ("dl_convention".into(), req.convention.name().into()),
            ("cautions".into(), cautions.join(" | ")),
        ],
    };
    crate::catalogue::write_table_with_text(
        &req.output,
        &out,
        &provenance,
        &WriteOptions {
            force: req.force,
            protected: vec![req.input.clone()],
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
        output: req.output.clone(),
        cautions,
    })
}
