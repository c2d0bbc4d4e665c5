//! Input columns → contiguous `f64` slices in canonical units, with a status per row.

use std::borrow::Cow;

use polars::prelude::*;

use crate::catalogue::Table;
use crate::physics::constants::{C_KM_S, DEG};
use crate::physics::estimators::DistanceKind;
use crate::physics::sky::{parse_dec_deg, parse_ra_deg};
use crate::plan::ColumnPlan;
use crate::settings::{AngleUnit, RedshiftUnit};

use super::status::{RowStatus, Z_CEILING};
use super::InputError;

/// The columns the physics needs, one value per row. Missing values are NaN, and the row's
/// status says why. A column that is already a complete f64 column in canonical units is
/// borrowed from the table, not copied.
#[derive(Debug, Clone)]
pub struct InputColumns<'a> {
    pub ra_deg: Cow<'a, [f64]>,
    pub dec_deg: Cow<'a, [f64]>,
    pub z_helio: Cow<'a, [f64]>,
    /// 1σ of z_helio; 0 when there is no error column, NaN when the row's entry is missing.
    pub z_err: Cow<'a, [f64]>,
    pub distance: Cow<'a, [f64]>,
    pub distance_err: Cow<'a, [f64]>,
    pub distance_kind: DistanceKind,
    pub status: Vec<u8>,
    /// Rows whose error entries are missing: their errors are reported as null.
    pub error_missing: Vec<bool>,
}

/// How one column is read.
#[derive(Clone, Copy)]
pub(crate) enum Reading {
    Number,
    Ra(Option<AngleUnit>),
    Dec(Option<AngleUnit>),
    /// A longitude in degrees (Galactic, supergalactic): sexagesimal text is degrees, not
    /// hours.
    LonDeg(Option<AngleUnit>),
}

/// How a longitude column in `frame` is read: a right ascension (text in hours) in the
/// equatorial frames, degrees otherwise.
pub(crate) fn longitude_reading(
    frame: crate::physics::sky::InputSkyFrame,
    unit: Option<AngleUnit>,
) -> Reading {
    if frame.is_equatorial() {
        Reading::Ra(unit)
    } else {
        Reading::LonDeg(unit)
    }
}

/// Read a column as numbers: numeric types are cast, text is parsed entry by entry. Returns
/// the values (NaN where missing or unparseable) and a per-row code: 0 fine, 1 missing,
/// 2 unparseable.
pub(crate) fn read_numbers<'a>(
    table: &'a Table,
    name: &str,
    how: Reading,
) -> Result<(Cow<'a, [f64]>, Vec<u8>), InputError> {
    let col = table
        .frame
        .column(name)
        .map_err(|e| InputError::column(name, e))?;
    let n = col.len();
    // A complete f64 column (one chunk, no nulls, every value finite) in canonical units is
    // used as it is.
    let canonical = !matches!(
        how,
        Reading::Ra(Some(AngleUnit::Rad | AngleUnit::Sexagesimal))
            | Reading::Dec(Some(AngleUnit::Rad | AngleUnit::Sexagesimal))
            | Reading::LonDeg(Some(AngleUnit::Rad | AngleUnit::Sexagesimal))
    );
    if canonical && col.dtype() == &DataType::Float64 && col.null_count() == 0 {
        if let Ok(values) = col
            .f64()
            .map_err(|e| InputError::column(name, e))?
            .cont_slice()
        {
            if values.iter().all(|x| x.is_finite()) {
                return Ok((Cow::Borrowed(values), vec![0u8; n]));
            }
        }
    }
    let mut values = vec![f64::NAN; n];
    let mut codes = vec![0u8; n];
    match col.dtype() {
        DataType::String => {
            let ca = col.str().map_err(|e| InputError::column(name, e))?;
            for (i, v) in ca.iter().enumerate() {
                match v.map(str::trim) {
                    None | Some("") => codes[i] = 1,
                    Some(t) => {
                        let parsed = match how {
                            Reading::Number => t.parse::<f64>().ok(),
                            Reading::Ra(Some(AngleUnit::Rad)) => {
                                t.parse::<f64>().ok().map(|x| x / DEG)
                            }
                            Reading::Dec(Some(AngleUnit::Rad))
                            | Reading::LonDeg(Some(AngleUnit::Rad)) => {
                                t.parse::<f64>().ok().map(|x| x / DEG)
                            }
                            // Decimal degrees or sexagesimal; range errors are left to the
                            // physics (position out of range), parse errors are ours.
                            Reading::Ra(_) => match parse_ra_deg(t) {
                                Ok(x) => Some(x),
                                Err(crate::physics::PhysicsError::Unparseable {
                                    reason, ..
                                }) if reason.contains("[0, 360]") => t.parse::<f64>().ok(),
                                Err(_) => None,
                            },
                            // Degrees, decimal or sexagesimal; the latitude range is the
                            // physics' to check, so a longitude passes.
                            Reading::Dec(_) | Reading::LonDeg(_) => match parse_dec_deg(t) {
                                Ok(x) => Some(x),
                                Err(crate::physics::PhysicsError::LatitudeOutOfRange {
                                    value,
                                    ..
                                }) => Some(value),
                                Err(_) => None,
                            },
                        };
                        match parsed {
                            Some(x) if x.is_finite() => values[i] = x,
                            _ => codes[i] = 2,
                        }
                    }
                }
            }
        }
        dt if dt.is_primitive_numeric() => {
            if let Reading::Ra(Some(AngleUnit::Sexagesimal))
            | Reading::Dec(Some(AngleUnit::Sexagesimal))
            | Reading::LonDeg(Some(AngleUnit::Sexagesimal)) = how
            {
                return Err(InputError::NumbersGivenAsSexagesimal {
                    name: name.to_string(),
                });
            }
            let f = col
                .cast(&DataType::Float64)
                .map_err(|e| InputError::column(name, e))?;
            let ca = f.f64().map_err(|e| InputError::column(name, e))?;
            let scale = match how {
                Reading::Ra(Some(AngleUnit::Rad))
                | Reading::Dec(Some(AngleUnit::Rad))
                | Reading::LonDeg(Some(AngleUnit::Rad)) => 1.0 / DEG,
                _ => 1.0,
            };
            for (i, v) in ca.iter().enumerate() {
                match v {
                    None => codes[i] = 1,
                    Some(x) if x.is_nan() => codes[i] = 1,
                    Some(x) if !x.is_finite() => codes[i] = 2,
                    Some(x) => values[i] = x * scale,
                }
            }
        }
        DataType::Null => codes.iter_mut().for_each(|c| *c = 1),
        other => {
            return Err(InputError::NotNumbers {
                name: name.to_string(),
                found: other.to_string(),
            })
        }
    }
    Ok((Cow::Owned(values), codes))
}

fn worst(status: &mut u8, s: RowStatus) {
    if *status == RowStatus::Ok as u8 {
        *status = s as u8;
    }
}

/// A redshift column that holds cz (or the reverse) is a whole-column mistake: the median
/// |value| tells them apart (5 splits z ≤ 5 from c·z ≥ 5 km/s).
pub(crate) fn check_redshift_unit(
    z: &[f64],
    column: &str,
    unit: RedshiftUnit,
) -> Result<(), InputError> {
    let mut finite: Vec<f64> = z
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .map(f64::abs)
        .collect();
    if !finite.is_empty() {
        let mid = finite.len() / 2;
        let median = *finite.select_nth_unstable_by(mid, |a, b| a.total_cmp(b)).1;
        match unit {
            RedshiftUnit::Z if median > 5.0 => {
                return Err(InputError::LooksLikeVelocity {
                    name: column.to_string(),
                    median,
                })
            }
            RedshiftUnit::Cz if median < 5.0 => {
                return Err(InputError::LooksLikeRedshift {
                    name: column.to_string(),
                    median,
                })
            }
            _ => {}
        }
    }
    Ok(())
}

/// Extract and check the inputs. Errors here are about whole columns (wrong type, a unit
/// that cannot be right); problems of single rows go into `status`.
pub fn extract<'a>(table: &'a Table, plan: &ColumnPlan) -> Result<InputColumns<'a>, InputError> {
    extract_with(table, plan, UnitGuard::Check)
}

/// Whether [`extract_with`] checks that the redshift column's values fit its unit (the cz
/// guard, on the median of the column): a block of a catalogue read in blocks leaves it to
/// [`check_redshift_column`] over the whole column, since a block's median is not the
/// column's.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum UnitGuard {
    Check,
    Checked,
}

/// The raw values of the redshift column (NaN where missing), for the cz guard of a
/// catalogue read in blocks.
pub fn redshift_column_values(table: &Table, plan: &ColumnPlan) -> Result<Vec<f64>, InputError> {
    Ok(read_numbers(table, &plan.z.column, Reading::Number)?
        .0
        .into_owned())
}

/// The cz guard over a whole redshift column gathered by [`redshift_column_values`].
pub fn check_redshift_column(z: &[f64], plan: &ColumnPlan) -> Result<(), InputError> {
    check_redshift_unit(z, &plan.z.column, plan.z_unit)
}

/// As [`extract`], with the cz guard as `guard` says.
pub fn extract_with<'a>(
    table: &'a Table,
    plan: &ColumnPlan,
    guard: UnitGuard,
) -> Result<InputColumns<'a>, InputError> {
    let n = table.frame.height();
    let mut status = vec![RowStatus::Ok as u8; n];
    // The columns are read in parallel; errors are reported in this fixed order.
    let optional = |r: &Option<crate::plan::columns::Resolved>| match r {
        Some(r) => read_numbers(table, &r.column, Reading::Number),
        None => Ok((Cow::Owned(vec![0.0; n]), vec![0; n])),
    };
    let ((ra, dec), ((z, dist), (z_err, dist_err))) = rayon::join(
        || {
            rayon::join(
                || {
                    read_numbers(
                        table,
                        &plan.ra.column,
                        longitude_reading(plan.sky_frame, plan.angle_unit),
                    )
                },
                || read_numbers(table, &plan.dec.column, Reading::Dec(plan.angle_unit)),
            )
        },
        || {
            rayon::join(
                || {
                    rayon::join(
                        || read_numbers(table, &plan.z.column, Reading::Number),
                        || read_numbers(table, &plan.distance.column, Reading::Number),
                    )
                },
                || rayon::join(|| optional(&plan.z_err), || optional(&plan.distance_err)),
            )
        },
    );
    let (ra, ra_c) = ra?;
    let (dec, dec_c) = dec?;
    let (mut z, z_c) = z?;
    let (dist, dist_c) = dist?;
    let (mut z_err, z_err_c) = z_err?;
    let (mut dist_err, dist_err_c) = dist_err?;

    if guard == UnitGuard::Check {
        check_redshift_unit(&z, &plan.z.column, plan.z_unit)?;
    }
    if plan.z_unit == RedshiftUnit::Cz {
        z.to_mut().iter_mut().for_each(|x| *x /= C_KM_S);
        z_err.to_mut().iter_mut().for_each(|x| *x /= C_KM_S);
    }

    let mut error_missing = vec![false; n];
    for i in 0..n {
        if z_err_c[i] == 1 || dist_err_c[i] == 1 {
            error_missing[i] = true;
            if z_err_c[i] == 1 {
                z_err.to_mut()[i] = 0.0;
            }
            if dist_err_c[i] == 1 {
                dist_err.to_mut()[i] = 0.0;
            }
        }
        let s = &mut status[i];
        for c in [
            ra_c[i],
            dec_c[i],
            z_c[i],
            dist_c[i],
            z_err_c[i],
            dist_err_c[i],
        ] {
            if c == 2 {
                worst(s, RowStatus::UnparseableValue);
            }
        }
        if ra_c[i] == 1 || dec_c[i] == 1 {
            worst(s, RowStatus::MissingPosition);
        }
        if z_c[i] == 1 {
            worst(s, RowStatus::MissingRedshift);
        }
        if dist_c[i] == 1 {
            worst(s, RowStatus::MissingDistance);
        }
        if ra_c[i] == 0 && dec_c[i] == 0 && (dec[i].abs() > 90.0 || !(0.0..=360.0).contains(&ra[i]))
        {
            worst(s, RowStatus::PositionOutOfRange);
        }
        if z_c[i] == 0 && (z[i] <= -1.0 || z[i] > Z_CEILING) {
            worst(s, RowStatus::RedshiftOutOfRange);
        }
        if dist_c[i] == 0
            && matches!(
                plan.distance_kind,
                DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da
            )
            && dist[i] <= 0.0
        {
            worst(s, RowStatus::NonPositiveDistance);
        }
        if (z_err_c[i] == 0 && z_err[i] < 0.0) || (dist_err_c[i] == 0 && dist_err[i] < 0.0) {
            worst(s, RowStatus::BadError);
        }
    }
    Ok(InputColumns {
        ra_deg: ra,
        dec_deg: dec,
        z_helio: z,
        z_err,
        distance: dist,
        distance_err: dist_err,
        distance_kind: plan.distance_kind,
        status,
        error_missing,
    })
}
