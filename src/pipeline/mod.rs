//! The columnar, parallel pipeline: input columns in, derived columns and a status per row
//! out. Rows are processed in chunks on rayon's pool, each chunk writing straight into its
//! slice of every output column, so no per-row allocation happens in the hot loop.

mod error;
pub mod given_frames;
pub mod inputs;
pub mod montecarlo;
pub mod status;

use std::collections::BTreeMap;

use polars::prelude::*;
use rayon::prelude::*;

use crate::catalogue::{ColumnMeta, Table};
use crate::physics::estimators::Distance;
use crate::physics::object::{evaluate, ObjectContext, ObjectInput, ObjectResult};
pub use error::InputError;
pub use inputs::{extract, InputColumns};
pub use status::RowStatus;

/// Rows per parallel work item.
pub const CHUNK: usize = 8192;

/// Names, units and UCDs of the derived columns, in output order. Names are stable.
pub use crate::catalogue::column_schema::DERIVED as OUTPUT_COLUMNS;

/// The derived values of one object in the order of [`OUTPUT_COLUMNS`].
pub fn output_values(r: &ObjectResult) -> [f64; 18] {
    [
        r.glon,
        r.glat,
        r.sgl,
        r.sgb,
        r.sgx,
        r.sgy,
        r.sgz,
        r.z_cmb,
        r.z_cos,
        r.z_cos_err,
        r.z_pec,
        r.v_pec,
        r.v_pec_err,
        r.eta,
        r.eta_err,
        r.d_c,
        r.v_rec,
        r.v_rec_err,
    ]
}

/// Indices of the error columns in [`OUTPUT_COLUMNS`] (nulled when an input error is missing).
mod col {
    pub const Z_COS_ERR: usize = 9;
    pub const V_PEC_ERR: usize = 12;
    pub const ETA_ERR: usize = 14;
    pub const V_REC_ERR: usize = 17;
}

/// Derived columns (NaN where the row's status is not ok) and the status codes.
#[derive(Debug, Clone)]
pub struct Derived {
    pub columns: Vec<Vec<f64>>,
    pub status: Vec<u8>,
    /// `v_pec_wf` and `v_pec_wf_err` (Watkins & Feldman 2015, for comparison), when asked
    /// for; the error is NaN where an input error is missing.
    pub watkins_feldman: Option<(Vec<f64>, Vec<f64>)>,
}

impl Derived {
    /// Column by name.
    pub fn get(&self, name: &str) -> Option<&[f64]> {
        OUTPUT_COLUMNS
            .iter()
            .position(|c| c.name == name)
            .map(|i| self.columns[i].as_slice())
    }

    /// Set every error column to NaN (written as null): for runs where no error was given,
    /// so that no one reads a zero as a measured error.
    pub fn clear_errors(&mut self) {
        for k in [col::Z_COS_ERR, col::V_PEC_ERR, col::ETA_ERR, col::V_REC_ERR] {
            self.columns[k].iter_mut().for_each(|v| *v = f64::NAN);
        }
        if let Some((_, err)) = &mut self.watkins_feldman {
            err.iter_mut().for_each(|v| *v = f64::NAN);
        }
    }

    /// Counts per status, in the order of [`RowStatus::ALL`].
    pub fn counts(&self) -> BTreeMap<RowStatus, usize> {
        let mut m = BTreeMap::new();
        for s in &self.status {
            *m.entry(RowStatus::from_u8(*s)).or_insert(0) += 1;
        }
        m
    }
}

/// One parallel work item: first row index, that chunk of every output column, and of the
/// per-row codes.
pub(crate) type Chunk<'a, T> = (usize, Vec<&'a mut [f64]>, &'a mut [T]);

/// Split `columns` (all of length n) and `status` into aligned chunks for parallel filling.
pub(crate) fn chunked<'a, T: Send>(
    columns: &'a mut [Vec<f64>],
    status: &'a mut [T],
) -> Vec<Chunk<'a, T>> {
    let mut iters: Vec<_> = columns.iter_mut().map(|c| c.chunks_mut(CHUNK)).collect();
    status
        .chunks_mut(CHUNK)
        .enumerate()
        .map(|(ci, st)| {
            let slices = iters
                .iter_mut()
                .map(|it| it.next().expect("aligned lengths"))
                .collect();
            (ci * CHUNK, slices, st)
        })
        .collect()
}

/// Run the physics over every row. `progress` is called with the number of rows done in
/// each finished chunk.
pub fn derive(
    ctx: &ObjectContext<'_>,
    input: &InputColumns,
    progress: &(dyn Fn(usize) + Sync),
) -> Derived {
    derive_with(ctx, input, progress, false)
}

/// As [`derive`]; with `watkins_feldman`, the same pass also keeps the Watkins & Feldman
/// (2015) estimate and its error of every row (two more columns, no second evaluation).
pub fn derive_with(
    ctx: &ObjectContext<'_>,
    input: &InputColumns,
    progress: &(dyn Fn(usize) + Sync),
    watkins_feldman: bool,
) -> Derived {
    let n = input.status.len();
    let base = OUTPUT_COLUMNS.len();
    let width = base + if watkins_feldman { 2 } else { 0 };
    let mut columns = vec![vec![f64::NAN; n]; width];
    let mut status = input.status.clone();
    chunked(&mut columns, &mut status)
        .into_par_iter()
        .for_each(|(start, mut out, st)| {
            for j in 0..st.len() {
                if st[j] != RowStatus::Ok as u8 {
                    continue;
                }
                let i = start + j;
                let obj = ObjectInput {
                    ra_deg: input.ra_deg[i],
                    dec_deg: input.dec_deg[i],
                    z_helio: input.z_helio[i],
                    z_err: input.z_err[i],
                    distance: Distance {
                        kind: input.distance_kind,
                        value: input.distance[i],
                        error: input.distance_err[i],
                    },
                };
                match evaluate(ctx, &obj) {
                    Ok(r) => {
                        let values = output_values(&r);
                        for (o, v) in out.iter_mut().zip(values) {
                            o[j] = v;
                        }
                        if watkins_feldman {
                            out[base][j] = r.v_pec_watkins_feldman;
                            out[base + 1][j] = r.v_pec_watkins_feldman_err;
                        }
                        if input.error_missing[i] {
                            for k in [col::Z_COS_ERR, col::V_PEC_ERR, col::ETA_ERR, col::V_REC_ERR]
                            {
                                out[k][j] = f64::NAN;
                            }
                            if watkins_feldman {
                                out[base + 1][j] = f64::NAN;
                            }
                        }
                    }
                    Err(e) => st[j] = RowStatus::from_physics(&e) as u8,
                }
            }
            progress(st.len());
        });
    let watkins_feldman = watkins_feldman.then(|| {
        let err = columns.pop().unwrap_or_default();
        let v = columns.pop().unwrap_or_default();
        (v, err)
    });
    Derived {
        columns,
        status,
        watkins_feldman,
    }
}

/// Add derived columns to the input table. An input column whose name a derived column
/// takes is kept, renamed `<name>_input`; the renames are returned.
pub fn assemble(
    input: &Table,
    derived: Derived,
    extra: Vec<(String, Vec<f64>, ColumnMeta)>,
    length_label: &str,
) -> Result<(Table, Vec<(String, String)>), String> {
    let mut frame = input.frame.clone();
    let mut meta = input.meta.clone();
    let ok: Vec<bool> = derived
        .status
        .iter()
        .map(|s| *s == RowStatus::Ok as u8)
        .collect();
    let mut new_columns: Vec<(String, Vec<f64>, ColumnMeta)> = OUTPUT_COLUMNS
        .iter()
        .zip(derived.columns)
        .map(|(spec, v)| (spec.name.to_string(), v, spec.meta(length_label)))
        .collect();
    new_columns.extend(extra);
    let mut renames = vec![];
    let taken: Vec<String> = new_columns
        .iter()
        .map(|c| c.0.clone())
        .chain(["status".to_string()])
        .collect();
    for name in &taken {
        if frame.column(name).is_ok() {
            let new_name = format!("{name}_input");
            frame
                .rename(name, new_name.as_str().into())
                .map_err(|e| e.to_string())?;
            if let Some(m) = meta.remove(name) {
                meta.insert(new_name.clone(), m);
            }
            renames.push((name.clone(), new_name));
        }
    }
    let mut cols: Vec<Column> = Vec::with_capacity(new_columns.len() + 1);
    for (name, values, m) in new_columns {
        // Move the buffer when every value stands; otherwise mark the gaps as nulls.
        let complete = values.iter().zip(&ok).all(|(v, ok)| *ok && v.is_finite());
        let ca = if complete {
            Float64Chunked::from_vec(name.as_str().into(), values)
        } else {
            Float64Chunked::from_iter_options(
                name.as_str().into(),
                values
                    .iter()
                    .zip(&ok)
                    .map(|(v, ok)| (*ok && v.is_finite()).then_some(*v)),
            )
        };
        cols.push(ca.into_series().into_column());
        meta.insert(name, m);
    }
    let status = StringChunked::from_iter_values(
        "status".into(),
        derived.status.iter().map(|s| RowStatus::from_u8(*s).name()),
    );
    cols.push(status.into_series().into_column());
    meta.insert(
        "status".into(),
        crate::catalogue::column_schema::STATUS.meta(length_label),
    );
    let frame = frame.hstack(&cols).map_err(|e| e.to_string())?;
    Ok((Table::new(frame, meta), renames))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn error_column_indices_match_names() {
        assert_eq!(OUTPUT_COLUMNS[col::Z_COS_ERR].name, "z_cos_err");
        assert_eq!(OUTPUT_COLUMNS[col::V_PEC_ERR].name, "v_pec_err");
        assert_eq!(OUTPUT_COLUMNS[col::ETA_ERR].name, "eta_err");
        assert_eq!(OUTPUT_COLUMNS[col::V_REC_ERR].name, "v_rec_err");
        assert_eq!(
            OUTPUT_COLUMNS.len(),
            output_values(&ObjectResult::default()).len()
        );
    }
}
