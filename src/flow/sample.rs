//! The per-object quantities the sample-level stages need, read from a flowsift output.

use polars::prelude::*;

use super::FlowError;
use crate::catalogue::Table;
use crate::physics::sky::{Direction, Galactic};

/// Columns of a flowsift output, as contiguous vectors; `usable` marks rows with status `ok`
/// and finite values.
#[derive(Debug, Clone)]
pub struct FlowSample {
    /// Galactic unit vectors.
    pub directions: Vec<[f64; 3]>,
    pub z_cmb: Vec<f64>,
    pub v_pec: Vec<f64>,
    pub v_pec_err: Vec<f64>,
    pub eta: Vec<f64>,
    pub eta_err: Vec<f64>,
    /// Comoving distance at z_cmb is not stored; d_c (at z_cos) is, in the output's unit.
    pub d_c: Vec<f64>,
    pub usable: Vec<bool>,
}

/// Column as f64 (nulls → NaN), or an error naming it and listing the columns.
pub fn float_column(table: &Table, name: &str) -> Result<Vec<f64>, FlowError> {
    let c = table.frame.column(name).map_err(|_| {
        let names: Vec<String> = table
            .frame
            .get_column_names()
            .iter()
            .map(|s| s.to_string())
            .collect();
        FlowError::NotFlowsiftOutput {
            name: name.to_string(),
            columns: names,
        }
    })?;
    let f = c
        .cast(&DataType::Float64)
        .map_err(|e| FlowError::column(name, e))?;
    Ok(f.f64()
        .map_err(|e| FlowError::column(name, e))?
        .iter()
        .map(|v| v.unwrap_or(f64::NAN))
        .collect())
}

/// Column as text (nulls → None).
pub fn text_column(table: &Table, name: &str) -> Result<Vec<Option<String>>, FlowError> {
    let c = table
        .frame
        .column(name)
        .map_err(|_| FlowError::MissingColumn {
            name: name.to_string(),
        })?;
    let s = c
        .cast(&DataType::String)
        .map_err(|e| FlowError::column(name, e))?;
    Ok(s.str()
        .map_err(|e| FlowError::column(name, e))?
        .iter()
        .map(|v| v.map(str::to_string))
        .collect())
}

impl FlowSample {
    /// Read from a flowsift output (columns glon, glat, z_cmb, v_pec, v_pec_err, eta,
    /// eta_err, d_c, status). Rows flagged `outlier` are not usable when `skip_outliers`.
    pub fn from_table(table: &Table, skip_outliers: bool) -> Result<FlowSample, FlowError> {
        let glon = float_column(table, "glon")?;
        let glat = float_column(table, "glat")?;
        let status = text_column(table, "status")?;
        let outlier: Option<Vec<Option<String>>> =
            if skip_outliers && table.frame.column("outlier").is_ok() {
                Some(text_column(table, "outlier")?)
            } else {
                None
            };
        let mut s = FlowSample {
            directions: Vec::with_capacity(glon.len()),
            z_cmb: float_column(table, "z_cmb")?,
            v_pec: float_column(table, "v_pec")?,
            v_pec_err: float_column(table, "v_pec_err")?,
            eta: float_column(table, "eta")?,
            eta_err: float_column(table, "eta_err")?,
            d_c: float_column(table, "d_c")?,
            usable: vec![],
        };
        for i in 0..glon.len() {
            let d = Direction::<Galactic>::from_lon_lat_deg(glon[i], glat[i]).ok();
            s.directions
                .push(d.map(|d| d.xyz()).unwrap_or([f64::NAN; 3]));
            let flagged = outlier
                .as_ref()
                .map(|o| matches!(o[i].as_deref(), Some("true") | Some("1")))
                .unwrap_or(false);
            s.usable.push(
                d.is_some()
                    && status[i].as_deref() == Some("ok")
                    && !flagged
                    && s.z_cmb[i].is_finite()
                    && s.v_pec[i].is_finite()
                    && s.eta[i].is_finite(),
            );
        }
        Ok(s)
    }

    pub fn len(&self) -> usize {
        self.usable.len()
    }

    pub fn is_empty(&self) -> bool {
        self.usable.is_empty()
    }
}
