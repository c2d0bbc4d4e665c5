//! Comparison estimators computed beside the exact one when asked for: the estimate of
//! Watkins & Feldman (2015) and its error, per row, in parallel chunks like [`super::derive`].
//! The estimator itself lives in `physics::estimators::watkins_feldman_velocity`.

use rayon::prelude::*;

use super::{chunked, InputColumns, RowStatus};
use crate::physics::estimators::Distance;
use crate::physics::object::{evaluate, ObjectContext, ObjectInput};

/// `v_pec_wf` and `v_pec_wf_err` for every row whose `status` is ok (NaN elsewhere, and
/// NaN errors where an input error is missing).
pub fn watkins_feldman_columns(
    ctx: &ObjectContext<'_>,
    input: &InputColumns,
    status: &[u8],
) -> (Vec<f64>, Vec<f64>) {
    let n = status.len();
    let mut columns = vec![vec![f64::NAN; n]; 2];
    let mut codes = status.to_vec();
    chunked(&mut columns, &mut codes)
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
                if let Ok(r) = evaluate(ctx, &obj) {
                    out[0][j] = r.v_pec_watkins_feldman;
                    if !input.error_missing[i] {
                        out[1][j] = r.v_pec_watkins_feldman_err;
                    }
                }
            }
        });
    let mut it = columns.into_iter();
    let v = it.next().unwrap_or_default();
    let e = it.next().unwrap_or_default();
    (v, e)
}
