//! The sample stages of a run — Malmquist correction, groups, outliers, bulk flow, export —
//! as functions over tables, shared by `velocities` and the stand-alone subcommands.

use std::path::Path;

use polars::prelude::*;

use crate::catalogue::column_schema::{meta_of, STAGE};
use crate::catalogue::{read_table, ReadOptions, Table};
use crate::flow::bulk_flow_report::{bulk_flow, BulkFlowReport};
use crate::flow::groups::{combine, Groups, Members};
use crate::flow::lcdm::lcdm_comparison;
use crate::flow::outliers::{flag_outliers, reason_text, OutlierResult, OutlierSettings};
use crate::flow::FlowSample;
use crate::physics::cosmology::Cosmology;
use crate::physics::dipole_likelihood::SigmaStar;
use crate::physics::estimators::{Distance, DistanceKind};
use crate::physics::malmquist::{
    homogeneous_malmquist_factor, homogeneous_malmquist_log_shift, malmquist_factor,
    malmquist_log_shift, RadialProfile,
};
use crate::physics::object::{cmb_redshift_of, evaluate_with, ObjectContext, ObjectInput};
use crate::pipeline::{output_values, Derived, InputColumns, RowStatus, OUTPUT_COLUMNS};
use crate::plan::ColumnPlan;
use crate::settings::{BulkFlowChoice, GroupChoice, MalmquistChoice, MalmquistMethod};

use super::RunError;

/// If `table` is a flowsift output (it has `status` and every derived column), drop the
/// derived columns so that they are recomputed rather than kept as `<name>_input`.
/// Returns the dropped names.
pub fn strip_earlier_run(table: Table) -> (Table, Vec<String>) {
    let has = |n: &str| table.frame.column(n).is_ok();
    if !(has("status") && OUTPUT_COLUMNS.iter().all(|c| has(c.name))) {
        return (table, vec![]);
    }
    let drop: Vec<String> = OUTPUT_COLUMNS
        .iter()
        .map(|c| c.name)
        .chain(["status"])
        .chain(STAGE.iter().map(|c| c.name))
        .filter(|n| has(n))
        .map(str::to_string)
        .collect();
    let Table {
        mut frame,
        mut meta,
        notes,
        keywords,
    } = table;
    for n in &drop {
        frame = frame.drop(n).expect("present");
        meta.remove(n);
    }
    (
        Table {
            frame,
            meta,
            notes,
            keywords,
        },
        drop,
    )
}

fn read_profile(path: &Path) -> Result<RadialProfile, String> {
    let t =
        read_table(path, &ReadOptions::default()).map_err(|e| format!("Malmquist profile: {e}"))?;
    let col = |n: &str| -> Result<Vec<f64>, String> {
        let c = t.frame.column(n).map_err(|_| {
            format!(
                "Malmquist profile {}: needs columns r and n",
                path.display()
            )
        })?;
        let f = c.cast(&DataType::Float64).map_err(|e| e.to_string())?;
        Ok(f.f64()
            .map_err(|e| e.to_string())?
            .iter()
            .map(|v| v.unwrap_or(f64::NAN))
            .collect())
    };
    RadialProfile::new(col("r")?, col("n")?)
        .map_err(|e| format!("Malmquist profile {}: {e}", path.display()))
}

/// Correct the distances of `input` for Malmquist bias in place. Returns the factor
/// E[r|d]/d and the corrected distance value per row, and a note for the summary. Distances
/// (D_L, D_C) and μ take the mean of r, E[r|d]; η, a logarithm, takes the mean of ln r,
/// E[ln r|d] (for the homogeneous case ln d + 3Δ², an η shift of −3Δ²/ln 10), so that the
/// η fitted by outliers and the bulk flow is not over-corrected by 0.5Δ²/ln 10. The profile
/// is looked up at the measured distance, for η from D_C(z_cmb) (η's own definition).
pub fn apply_malmquist(
    input: &mut InputColumns,
    choice: &MalmquistChoice,
    ctx: &ObjectContext<'_>,
) -> Result<(Vec<f64>, Vec<f64>, String), String> {
    let cosmology = ctx.cosmology;
    let length_factor = ctx.length_unit.from_mpc_factor(cosmology.params());
    let method = if choice.profile.is_some() {
        MalmquistMethod::Profile
    } else {
        choice.method.unwrap_or_default()
    };
    let profile = match (method, &choice.profile) {
        (MalmquistMethod::Profile, Some(p)) => Some(read_profile(Path::new(p))?),
        (MalmquistMethod::Profile, None) => {
            return Err(
                "Malmquist method 'profile' needs a profile table (profile = \"file\")".into(),
            )
        }
        _ => None,
    };
    let n = input.status.len();
    let mut factor = vec![f64::NAN; n];
    let mut corrected = vec![f64::NAN; n];
    let ln10 = std::f64::consts::LN_10;
    let mut without_error = 0;
    for i in 0..n {
        if input.status[i] != RowStatus::Ok as u8 {
            continue;
        }
        let (q, e) = (input.distance[i], input.distance_err[i]);
        let delta = match input.distance_kind {
            DistanceKind::Mu => ln10 / 5.0 * e,
            DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da => e / q,
            DistanceKind::Eta => ln10 * e,
        };
        if !(delta.is_finite() && delta > 0.0) {
            without_error += 1;
            factor[i] = 1.0;
            corrected[i] = q;
            continue;
        }
        // The measured distance d in the run's length unit (for the profile).
        let d = match input.distance_kind {
            DistanceKind::Mu => {
                crate::physics::cosmology::luminosity_distance_of(q) * length_factor
            }
            DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da => q,
            DistanceKind::Eta => {
                let z = cmb_redshift_of(ctx, input.ra_deg[i], input.dec_deg[i], input.z_helio[i])
                    .unwrap_or(f64::NAN)
                    .max(1e-6);
                cosmology.comoving_distance(z).unwrap_or(f64::NAN) * 10f64.powf(-q) * length_factor
            }
        };
        let f = match &profile {
            Some(p) => malmquist_factor(d, delta, p).unwrap_or(f64::NAN),
            None => homogeneous_malmquist_factor(delta),
        };
        factor[i] = f;
        let c = match input.distance_kind {
            DistanceKind::Mu => q + 5.0 * f.log10(),
            DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da => q * f,
            DistanceKind::Eta => {
                let shift = match &profile {
                    Some(p) => malmquist_log_shift(d, delta, p).unwrap_or(f64::NAN),
                    None => homogeneous_malmquist_log_shift(delta),
                };
                q - shift / ln10
            }
        };
        corrected[i] = c;
        input.distance.to_mut()[i] = c;
    }
    let mut note = match method {
        MalmquistMethod::Homogeneous => "Distances corrected for homogeneous Malmquist bias, E[r|d] = d exp(3.5 Δ²) (Lynden-Bell et al. 1988), η by the mean of ln r, E[ln r|d] = ln d + 3Δ²; v_pec uses the corrected distance, the input column keeps the uncorrected one.".to_string(),
        MalmquistMethod::Profile => format!(
            "Distances corrected for Malmquist bias with the density profile {} (general form, Lynden-Bell et al. 1988); v_pec uses the corrected distance.",
            choice.profile.as_deref().unwrap_or("")
        ),
    };
    if without_error > 0 {
        note.push_str(&format!(
            " {without_error} rows without a distance error are uncorrected."
        ));
    }
    Ok((factor, corrected, note))
}

/// The group table and the group index of each member.
pub fn group_table(
    ctx: &ObjectContext<'_>,
    members_table: &Table,
    plan: &ColumnPlan,
    input: &InputColumns,
    derived: &Derived,
    choice: &GroupChoice,
    malmquist: Option<&MalmquistChoice>,
) -> Result<(Table, Groups, Option<String>), RunError> {
    let key_col = plan.group_id.as_ref().ok_or(
        "groups need a group column: group_id by default, or --group-column / [columns] group_id",
    )?;
    let key = crate::flow::sample::text_column(members_table, &key_col.column)?;
    let central: Option<Vec<bool>> = match &choice.central_column {
        Some(c) => {
            let v = crate::flow::sample::text_column(members_table, c)
                .map_err(|_| format!("the central-member column '{c}' is not in the file"))?;
            Some(
                v.iter()
                    .map(|s| {
                        matches!(
                            s.as_deref().map(str::to_ascii_lowercase).as_deref(),
                            Some("true") | Some("1") | Some("t") | Some("yes")
                        )
                    })
                    .collect(),
            )
        }
        None => None,
    };
    let z_cmb = derived.get("z_cmb").expect("derived column");
    let ok: Vec<bool> = derived
        .status
        .iter()
        .map(|s| *s == RowStatus::Ok as u8)
        .collect();
    let g = combine(&Members {
        key: &key,
        ra_deg: &input.ra_deg,
        dec_deg: &input.dec_deg,
        z_helio: &input.z_helio,
        z_err: &input.z_err,
        z_cmb,
        distance: &input.distance,
        distance_err: &input.distance_err,
        kind: input.distance_kind,
        ok: &ok,
        central: central.as_deref(),
    });
    let n = g.key.len();
    let mut cols = vec![vec![f64::NAN; n]; OUTPUT_COLUMNS.len()];
    let mut status: Vec<u8> = (0..n)
        .map(|gi| {
            if g.n_members[gi] == 0 {
                derived.status[g.members[gi][0]]
            } else {
                RowStatus::Ok as u8
            }
        })
        .collect();
    // The group's own Malmquist correction, with the group's (smaller) distance error.
    let mut group_input = InputColumns {
        ra_deg: g.ra_deg.clone().into(),
        dec_deg: g.dec_deg.clone().into(),
        z_helio: g.z_helio.clone().into(),
        z_err: g.z_err.clone().into(),
        distance: g.distance.clone().into(),
        distance_err: g
            .distance_err
            .iter()
            .map(|e| if e.is_finite() { *e } else { 0.0 })
            .collect::<Vec<f64>>()
            .into(),
        distance_kind: input.distance_kind,
        status: status.clone(),
        error_missing: g.distance_err.iter().map(|e| !e.is_finite()).collect(),
    };
    let malmquist_note = match malmquist {
        Some(m) => Some(apply_malmquist(&mut group_input, m, ctx)?.2),
        None => None,
    };
    for gi in 0..n {
        if status[gi] != RowStatus::Ok as u8 {
            continue;
        }
        let err = g.distance_err[gi];
        let obj = ObjectInput {
            ra_deg: g.ra_deg[gi],
            dec_deg: g.dec_deg[gi],
            z_helio: g.z_helio[gi],
            z_err: g.z_err[gi],
            distance: Distance {
                kind: input.distance_kind,
                value: group_input.distance[gi],
                error: group_input.distance_err[gi],
            },
        };
        match evaluate_with(ctx, &obj, Some(g.z_cmb[gi])) {
            Ok(r) => {
                let values = output_values(&r);
                for (c, v) in cols.iter_mut().zip(values) {
                    c[gi] = v;
                }
                if !err.is_finite() {
                    for name in ["z_cos_err", "v_pec_err", "eta_err"] {
                        let k = OUTPUT_COLUMNS
                            .iter()
                            .position(|c| c.name == name)
                            .expect("known");
                        cols[k][gi] = f64::NAN;
                    }
                }
            }
            Err(e) => status[gi] = RowStatus::from_physics(&e) as u8,
        }
    }
    let dist_name = plan.distance.column.clone();
    let dist_err_name = format!("{dist_name}_err");
    let mut frame_cols = vec![
        Column::new("group_id".into(), g.key.clone()),
        Column::new(
            "n_members".into(),
            g.n_members.iter().map(|x| *x as i64).collect::<Vec<_>>(),
        ),
        Column::new("ra".into(), g.ra_deg.clone()),
        Column::new("dec".into(), g.dec_deg.clone()),
        Column::new("z_helio".into(), g.z_helio.clone()),
        Column::new("z_err".into(), g.z_err.clone()),
        Column::new(dist_name.as_str().into(), g.distance.clone()),
        Column::new(
            dist_err_name.as_str().into(),
            g.distance_err
                .iter()
                .map(|e| e.is_finite().then_some(*e))
                .collect::<Vec<_>>(),
        ),
    ];
    let base = Table::new(
        DataFrame::new(n, std::mem::take(&mut frame_cols)).map_err(|e| e.to_string())?,
        Default::default(),
    );
    let group_derived = Derived {
        columns: cols,
        status,
        watkins_feldman: None,
    };
    let (mut table, _) =
        crate::pipeline::assemble(&base, group_derived, vec![], plan.length_unit.label())?;
    for c in &crate::catalogue::column_schema::GROUP_TABLE {
        table.meta.insert(c.name.into(), c.meta(""));
    }
    Ok((table, g, malmquist_note))
}

/// Add `outlier` and `outlier_reason` to a flowsift table (replacing earlier ones).
pub fn add_outliers(
    table: &mut Table,
    cosmology: &Cosmology,
    settings: &OutlierSettings,
) -> Result<OutlierResult, RunError> {
    let sample = FlowSample::from_table(table, false)?;
    let result = flag_outliers(&sample, cosmology, settings)?;
    for name in ["outlier", "outlier_reason"] {
        if table.frame.column(name).is_ok() {
            table.frame = table.frame.drop(name).map_err(|e| e.to_string())?;
        }
    }
    let flags: Vec<bool> = result.reasons.iter().map(|r| *r != 0).collect();
    let reasons: Vec<String> = result.reasons.iter().map(|r| reason_text(*r)).collect();
    table.frame = table
        .frame
        .hstack(&[
            Column::new("outlier".into(), flags),
            Column::new("outlier_reason".into(), reasons),
        ])
        .map_err(|e| e.to_string())?;
    for name in ["outlier", "outlier_reason"] {
        table.meta.insert(name.into(), meta_of(name, ""));
    }
    Ok(result)
}

/// The bulk flow of a flowsift table.
pub fn bulk_flow_of_table(
    table: &Table,
    cosmology: &Cosmology,
    choice: &BulkFlowChoice,
) -> Result<BulkFlowReport, RunError> {
    let include_outliers = choice.filled().include_outliers.unwrap_or(false);
    let sample = FlowSample::from_table(table, !include_outliers)?;
    let sigma_star = choice
        .sigma_star
        .map(SigmaStar::Fixed)
        .unwrap_or(SigmaStar::Fit);
    if let SigmaStar::Fixed(s) = sigma_star {
        if !(s.is_finite() && s >= 0.0) {
            return Err(RunError::Failed(format!(
                "bulk flow: sigma_star must be non-negative, got {s}"
            )));
        }
    }
    let hook =
        |fit: &crate::physics::dipole_likelihood::BulkFlowFit, pos: &[[f64; 3]], kappa: &[f64]| {
            lcdm_comparison(fit, pos, kappa, cosmology, choice)
        };
    let lcdm: Option<&crate::flow::bulk_flow_report::LcdmHook<'_>> = if choice.lcdm.unwrap_or(true)
    {
        Some(&hook)
    } else {
        None
    };
    Ok(bulk_flow(
        &sample,
        cosmology,
        choice.quantity.unwrap_or_default(),
        sigma_star,
        lcdm,
    )?)
}

/// Give each member row the index of its group (`group_index`).
pub fn add_group_index(table: &mut Table, groups: &Groups) -> Result<(), RunError> {
    let idx: Vec<i64> = groups.group_of.iter().map(|x| *x as i64).collect();
    table.frame = table
        .frame
        .hstack(&[Column::new("group_index".into(), idx)])
        .map_err(|e| e.to_string())?;
    table
        .meta
        .insert("group_index".into(), meta_of("group_index", ""));
    Ok(())
}
