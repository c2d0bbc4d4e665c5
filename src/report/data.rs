//! The columns the figures and the report need, read once from a flowsift output.

use std::collections::BTreeMap;

use polars::prelude::{Column, DataType};

use super::ReportError;
use super::SkyChoice;
use crate::catalogue::Table;
use crate::physics::cosmology::Cosmology;
use crate::physics::dipole_likelihood::eta_per_velocity;
use crate::physics::sky::{galactic_to_supergalactic, Direction, Galactic, Supergalactic};

/// One row with status ok; missing numbers are NaN.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Row {
    /// Sky position in the chosen frame, degrees.
    pub lon: f64,
    pub lat: f64,
    pub z: f64,
    pub v: f64,
    pub v_err: f64,
    pub d: f64,
    pub mu: f64,
    pub mu_err: f64,
    pub truth: f64,
    pub outlier: bool,
    pub eta: f64,
    pub eta_err: f64,
    /// Galactic position, degrees (for flow fits, which are made in Galactic axes).
    pub glon: f64,
    pub glat: f64,
    /// Redshift distance D_C(z_cmb) in the model cosmology, Mpc (filled by
    /// [`Sample::fill_depths`]).
    pub depth: f64,
    /// κ = ∂η/∂v at z_cmb, s/km (filled by [`Sample::fill_depths`]).
    pub kappa: f64,
}

/// The rows with status ok and the counts of the rest.
#[derive(Debug, Clone)]
pub(crate) struct Sample {
    pub rows: Vec<Row>,
    /// Rows in the table.
    pub total: usize,
    /// Rows whose status is not ok (or missing).
    pub not_ok: usize,
    pub has_mu: bool,
    pub has_truth: bool,
    /// The column read as μ (`mu`, or the one the run's record maps to the distance modulus).
    pub mu_column: String,
}

/// Numbers of a column as f64 (NaN where null or not numeric); `None` if there is no such
/// column.
pub(crate) fn numbers(table: &Table, name: &str) -> Result<Option<Vec<f64>>, ReportError> {
    let Ok(c) = table.frame.column(name) else {
        return Ok(None);
    };
    let f = c
        .cast(&DataType::Float64)
        .map_err(|e| ReportError::column(name, format!("not numeric ({e})")))?;
    let f = f
        .f64()
        .map_err(|e| ReportError::column(name, format!("not numeric ({e})")))?;
    Ok(Some(f.iter().map(|v| v.unwrap_or(f64::NAN)).collect()))
}

/// Text of a column (None where null); `None` if there is no such column.
pub(crate) fn texts(table: &Table, name: &str) -> Result<Option<Vec<Option<String>>>, ReportError> {
    let Ok(c) = table.frame.column(name) else {
        return Ok(None);
    };
    let s = c
        .cast(&DataType::String)
        .map_err(|e| ReportError::column(name, format!("not text ({e})")))?;
    let s = s
        .str()
        .map_err(|e| ReportError::column(name, format!("not text ({e})")))?;
    Ok(Some(
        s.iter().map(|v| v.map(|t| t.trim().to_string())).collect(),
    ))
}

/// Flags of a column (booleans, or text true/false/T/F/1/0, or numbers ≠ 0); `None` if there
/// is no such column.
pub(crate) fn flags(table: &Table, name: &str) -> Result<Option<Vec<bool>>, ReportError> {
    let Ok(c) = table.frame.column(name) else {
        return Ok(None);
    };
    Ok(Some(column_flags(c, name)?))
}

fn column_flags(c: &Column, name: &str) -> Result<Vec<bool>, ReportError> {
    match c.dtype() {
        DataType::Boolean => Ok(c
            .bool()
            .map_err(|e| ReportError::column(name, e.to_string()))?
            .iter()
            .map(|b| b.unwrap_or(false))
            .collect()),
        DataType::String => Ok(c
            .str()
            .map_err(|e| ReportError::column(name, e.to_string()))?
            .iter()
            .map(|t| {
                matches!(
                    t.map(|t| t.trim().to_ascii_lowercase()).as_deref(),
                    Some("true" | "t" | "1" | "yes")
                )
            })
            .collect()),
        _ => {
            let f = c
                .cast(&DataType::Float64)
                .map_err(|e| ReportError::column(name, format!("not a flag ({e})")))?;
            Ok(f.f64()
                .map_err(|e| ReportError::column(name, format!("not a flag ({e})")))?
                .iter()
                .map(|v| v.is_some_and(|v| v != 0.0))
                .collect())
        }
    }
}

fn required(table: &Table, name: &str) -> Result<Vec<f64>, ReportError> {
    numbers(table, name)?.ok_or_else(|| ReportError::MissingColumn { name: name.into() })
}

/// Whether a status value means the row is usable.
pub(crate) fn is_ok(status: Option<&str>) -> bool {
    status.is_some_and(|s| s.eq_ignore_ascii_case("ok"))
}

impl Sample {
    /// The rows with status ok; μ from `mu`, else from `mu_column` (name, error column) when
    /// given (the distance-modulus column the run's record names).
    pub(crate) fn from_table(
        table: &Table,
        sky: SkyChoice,
        mu_column: Option<&(String, Option<String>)>,
    ) -> Result<Sample, ReportError> {
        let n = table.frame.height();
        let z = required(table, "z_cmb")?;
        let v = required(table, "v_pec")?;
        let v_err = required(table, "v_pec_err")?;
        let d = required(table, "d_c")?;
        let status = texts(table, "status")?.ok_or_else(|| ReportError::MissingColumn {
            name: "status".into(),
        })?;
        let (mu_name, mu, mu_err) = match numbers(table, "mu")? {
            Some(m) => ("mu".to_string(), Some(m), numbers(table, "mu_err")?),
            None => match mu_column {
                Some((name, err)) => {
                    let err_name = err.clone().unwrap_or_else(|| format!("{name}_err"));
                    (
                        name.clone(),
                        numbers(table, name)?,
                        numbers(table, &err_name)?,
                    )
                }
                None => ("mu".to_string(), None, None),
            },
        };
        let eta = numbers(table, "eta")?;
        let eta_err = numbers(table, "eta_err")?;
        let (glon, glat) = sky_columns(table, SkyChoice::Galactic, n)?;
        let truth = numbers(table, "true_v_pec")?;
        let outlier = flags(table, "outlier")?;
        let (lon, lat) = sky_columns(table, sky, n)?;
        let nan = |c: &Option<Vec<f64>>, i: usize| c.as_ref().map_or(f64::NAN, |c| c[i]);
        let mut rows = Vec::with_capacity(n);
        for i in 0..n {
            if !is_ok(status[i].as_deref()) {
                continue;
            }
            rows.push(Row {
                lon: lon[i],
                lat: lat[i],
                z: z[i],
                v: v[i],
                v_err: v_err[i],
                d: d[i],
                mu: nan(&mu, i),
                mu_err: nan(&mu_err, i),
                truth: nan(&truth, i),
                outlier: outlier.as_ref().is_some_and(|o| o[i]),
                eta: nan(&eta, i),
                eta_err: nan(&eta_err, i),
                glon: glon[i],
                glat: glat[i],
                depth: f64::NAN,
                kappa: f64::NAN,
            });
        }
        Ok(Sample {
            not_ok: n - rows.len(),
            total: n,
            rows,
            has_mu: mu.is_some(),
            has_truth: truth.is_some(),
            mu_column: mu_name,
        })
    }

    /// Redshift distance D_C(z_cmb) and κ = ∂η/∂v of every row in `cosmology`.
    pub(crate) fn fill_depths(&mut self, cosmology: &Cosmology) {
        for r in &mut self.rows {
            if r.z.is_finite() && r.z > -1.0 {
                r.depth = cosmology.comoving_distance(r.z).unwrap_or(f64::NAN);
                r.kappa = eta_per_velocity(cosmology, r.z).unwrap_or(f64::NAN);
            }
        }
    }
}

/// Longitudes and latitudes in the chosen frame: from its own columns, else converted from the
/// other frame's; NaN where neither is there.
fn sky_columns(
    table: &Table,
    sky: SkyChoice,
    n: usize,
) -> Result<(Vec<f64>, Vec<f64>), ReportError> {
    let (own, other) = match sky {
        SkyChoice::Galactic => (("glon", "glat"), ("sgl", "sgb")),
        SkyChoice::Supergalactic => (("sgl", "sgb"), ("glon", "glat")),
    };
    if let (Some(lon), Some(lat)) = (numbers(table, own.0)?, numbers(table, own.1)?) {
        return Ok((lon, lat));
    }
    if let (Some(lon), Some(lat)) = (numbers(table, other.0)?, numbers(table, other.1)?) {
        let mut out_lon = Vec::with_capacity(n);
        let mut out_lat = Vec::with_capacity(n);
        for (l, b) in lon.into_iter().zip(lat) {
            let (a, c) = match sky {
                SkyChoice::Galactic => supergalactic_to_galactic_deg(l, b),
                SkyChoice::Supergalactic => galactic_to_supergalactic_deg(l, b),
            };
            out_lon.push(a);
            out_lat.push(c);
        }
        return Ok((out_lon, out_lat));
    }
    Ok((vec![f64::NAN; n], vec![f64::NAN; n]))
}

/// Galactic (l, b) → supergalactic (SGL, SGB), degrees; NaN on bad input.
pub(crate) fn galactic_to_supergalactic_deg(l: f64, b: f64) -> (f64, f64) {
    match Direction::<Galactic>::from_lon_lat_deg(l, b) {
        Ok(d) => galactic_to_supergalactic().apply(&d).lon_lat_deg(),
        Err(_) => (f64::NAN, f64::NAN),
    }
}

/// Supergalactic (SGL, SGB) → Galactic (l, b), degrees; NaN on bad input.
pub(crate) fn supergalactic_to_galactic_deg(l: f64, b: f64) -> (f64, f64) {
    match Direction::<Supergalactic>::from_lon_lat_deg(l, b) {
        Ok(d) => galactic_to_supergalactic()
            .inverse()
            .apply(&d)
            .lon_lat_deg(),
        Err(_) => (f64::NAN, f64::NAN),
    }
}

/// Rows per status value, in order of count (largest first), "ok" first.
pub(crate) fn status_counts(table: &Table) -> Result<Vec<(String, usize)>, ReportError> {
    let mut counts: BTreeMap<String, usize> = BTreeMap::new();
    if let Some(status) = texts(table, "status")? {
        for s in status {
            let key = match s {
                Some(s) if !s.is_empty() => s,
                _ => "(no status)".to_string(),
            };
            *counts.entry(key).or_default() += 1;
        }
    }
    let mut v: Vec<(String, usize)> = counts.into_iter().collect();
    v.sort_by(|a, b| {
        (b.0.eq_ignore_ascii_case("ok"), b.1)
            .cmp(&(a.0.eq_ignore_ascii_case("ok"), a.1))
            .then(a.0.cmp(&b.0))
    });
    Ok(v)
}

/// Outlier counts: total flagged, per single reason, and per combination of reasons.
#[derive(Debug, Clone, Default)]
pub(crate) struct OutlierSummary {
    pub has_column: bool,
    pub flagged: usize,
    pub per_reason: Vec<(String, usize)>,
    pub per_combination: Vec<(String, usize)>,
}

pub(crate) fn outlier_summary(table: &Table) -> Result<OutlierSummary, ReportError> {
    let Some(flag) = flags(table, "outlier")? else {
        return Ok(OutlierSummary::default());
    };
    let reasons = texts(table, "outlier_reason")?;
    let mut per: BTreeMap<String, usize> = BTreeMap::new();
    let mut combos: BTreeMap<String, usize> = BTreeMap::new();
    let mut flagged = 0;
    for (i, f) in flag.iter().enumerate() {
        if !f {
            continue;
        }
        flagged += 1;
        let text = reasons
            .as_ref()
            .and_then(|r| r[i].clone())
            .unwrap_or_default();
        let parts: Vec<&str> = text
            .split([',', ';', '|'])
            .map(str::trim)
            .filter(|p| !p.is_empty())
            .collect();
        if parts.is_empty() {
            *per.entry("(no reason given)".into()).or_default() += 1;
            *combos.entry("(no reason given)".into()).or_default() += 1;
        } else {
            for p in &parts {
                *per.entry(p.to_string()).or_default() += 1;
            }
            *combos.entry(parts.join(" + ")).or_default() += 1;
        }
    }
    let sorted = |m: BTreeMap<String, usize>| {
        let mut v: Vec<(String, usize)> = m.into_iter().collect();
        v.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(&b.0)));
        v
    };
    Ok(OutlierSummary {
        has_column: true,
        flagged,
        per_reason: sorted(per),
        per_combination: sorted(combos),
    })
}
