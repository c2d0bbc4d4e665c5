//! The flow-sample export: what a flow-field analysis reads — supergalactic Cartesian
//! positions in Mpc and h⁻¹ Mpc, the radial velocity and η with errors, and the flags.

use polars::prelude::*;

use crate::catalogue::{ColumnMeta, Table};
use crate::physics::sky::{Direction, Galactic, SkyRotations};

use super::sample::{float_column, text_column};
use super::FlowError;

/// What went into the export.
#[derive(Debug, Clone, serde::Serialize)]
pub struct ExportSummary {
    pub rows_in: usize,
    pub rows_out: usize,
    pub not_ok: usize,
    pub outliers_left_out: usize,
}

/// Names of an object-name column, looked for in this order (ASCII case ignored) when no
/// column carries the UCD `meta.id;meta.main` (IVOA UCD1+, the main identifier).
const NAME_COLUMNS: [&str; 5] = ["name", "object", "objname", "galaxy", "id"];

/// The column holding each object's name, if the table has one: the first with UCD
/// `meta.id;meta.main`, else the first of [`NAME_COLUMNS`].
fn name_column(table: &Table) -> Option<String> {
    let names: Vec<String> = table
        .frame
        .get_column_names()
        .iter()
        .map(|n| n.to_string())
        .collect();
    names
        .iter()
        .find(|n| {
            table
                .meta
                .get(n.as_str())
                .and_then(|m| m.ucd.as_deref())
                .is_some_and(|u| u.trim().eq_ignore_ascii_case("meta.id;meta.main"))
        })
        .or_else(|| {
            NAME_COLUMNS
                .iter()
                .find_map(|want| names.iter().find(|n| n.eq_ignore_ascii_case(want)))
        })
        .filter(|n| !matches!(n.as_str(), "row" | "group_id"))
        .cloned()
}

/// Build the export table from a flowsift output. `distance_unit_is_h` says whether the
/// output's d_c is in h⁻¹ Mpc; `h` is H0/100. Rows whose status is not ok are left out, and
/// so are outliers unless `keep_outliers`; the `row` column gives each row's index in the
/// input, so nothing is lost silently.
pub fn export_table(
    table: &Table,
    h: f64,
    distance_unit_is_h: bool,
    keep_outliers: bool,
) -> Result<(Table, ExportSummary), FlowError> {
    let glon = float_column(table, "glon")?;
    let glat = float_column(table, "glat")?;
    let d_c = float_column(table, "d_c")?;
    let status = text_column(table, "status")?;
    let outlier = if table.frame.column("outlier").is_ok() {
        Some(text_column(table, "outlier")?)
    } else {
        None
    };
    let n = glon.len();
    let rot = SkyRotations::default();
    let mut keep = vec![];
    let (mut not_ok, mut left_out) = (0, 0);
    for i in 0..n {
        if status[i].as_deref() != Some("ok") {
            not_ok += 1;
            continue;
        }
        let is_outlier = outlier
            .as_ref()
            .map(|o| matches!(o[i].as_deref(), Some("true") | Some("1")))
            .unwrap_or(false);
        if is_outlier && !keep_outliers {
            left_out += 1;
            continue;
        }
        keep.push(i);
    }
    let to_mpc = if distance_unit_is_h { 1.0 / h } else { 1.0 };
    let mut cols: Vec<(String, Vec<f64>, &str, &str)> = vec![];
    let mut sg = [vec![], vec![], vec![]];
    for &i in &keep {
        let d = Direction::<Galactic>::from_lon_lat_deg(glon[i], glat[i]).map_err(|e| {
            FlowError::Row {
                row: i + 1,
                problem: e.to_string(),
            }
        })?;
        let p = rot
            .galactic_to_supergalactic
            .apply(&d)
            .at_distance(d_c[i] * to_mpc);
        for a in 0..3 {
            sg[a].push(p[a]);
        }
    }
    for (a, axis) in ["sgx", "sgy", "sgz"].iter().enumerate() {
        cols.push((axis.to_string(), sg[a].clone(), "Mpc", "pos.cartesian"));
    }
    for (a, axis) in ["sgx_h", "sgy_h", "sgz_h"].iter().enumerate() {
        cols.push((
            axis.to_string(),
            sg[a].iter().map(|x| x * h).collect(),
            "Mpc/h",
            "pos.cartesian",
        ));
    }
    for (name, unit, ucd) in [
        ("z_cmb", "", "src.redshift"),
        ("v_pec", "km/s", "phys.veloc"),
        ("v_pec_err", "km/s", "stat.error;phys.veloc"),
        ("eta", "", "pos.distance"),
        ("eta_err", "", "stat.error;pos.distance"),
    ] {
        let v = float_column(table, name)?;
        cols.push((
            name.to_string(),
            keep.iter().map(|&i| v[i]).collect(),
            unit,
            ucd,
        ));
    }
    let mut columns = vec![Column::new(
        "row".into(),
        keep.iter().map(|&i| i as i64).collect::<Vec<_>>(),
    )];
    let mut meta = std::collections::BTreeMap::new();
    meta.insert(
        "row".to_string(),
        ColumnMeta {
            unit: None,
            ucd: Some("meta.id".into()),
            description: None,
        },
    );
    if let Some(name) = name_column(table) {
        let v = text_column(table, &name)?;
        columns.push(Column::new(
            name.as_str().into(),
            keep.iter().map(|&i| v[i].clone()).collect::<Vec<_>>(),
        ));
        meta.insert(
            name,
            ColumnMeta {
                unit: None,
                ucd: Some("meta.id;meta.main".into()),
                description: None,
            },
        );
    }
    if table.frame.column("group_id").is_ok() {
        let g = text_column(table, "group_id")?;
        columns.push(Column::new(
            "group_id".into(),
            keep.iter().map(|&i| g[i].clone()).collect::<Vec<_>>(),
        ));
    }
    for (name, v, unit, ucd) in cols {
        meta.insert(
            name.clone(),
            ColumnMeta {
                unit: (!unit.is_empty()).then(|| unit.to_string()),
                ucd: Some(ucd.to_string()),
                description: None,
            },
        );
        columns.push(Column::new(name.as_str().into(), v));
    }
    if let Some(o) = &outlier {
        columns.push(Column::new(
            "outlier".into(),
            keep.iter()
                .map(|&i| matches!(o[i].as_deref(), Some("true") | Some("1")))
                .collect::<Vec<_>>(),
        ));
    }
    let frame = DataFrame::new(keep.len(), columns).map_err(|e| FlowError::Table(e.to_string()))?;
    Ok((
        Table::new(frame, meta),
        ExportSummary {
            rows_in: n,
            rows_out: keep.len(),
            not_ok,
            outliers_left_out: left_out,
        },
    ))
}
