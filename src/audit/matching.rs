//! Residuals of every candidate, the one that reproduces the column best, the tolerance a
//! row must meet, and each row's verdict.
//!
//! The best candidate is the one with the smallest median |residual| (robust against a few
//! altered rows; the rms breaks ties). A candidate with a parameter fitted to the column
//! (apex, H0, h) is preferred to a fixed one only when no fixed candidate reproduces the
//! column to its resolution, since a fit can always come closer. The tolerance is the
//! quantity's resolution or five robust standard deviations of the best residuals, whichever
//! is larger (or the user's). A row within it of the best candidate matches; one within it
//! of another candidate matches that one; any other row is unexplained.

use std::collections::BTreeMap;

use schemars::JsonSchema;
use serde::Serialize;
use serde_json::Value;

use super::apex_fit::{robust_scale, FittedApex};
use super::candidates::Candidate;
use super::quantity::Quantity;

/// One candidate's fit to the column.
#[derive(Debug, Clone, Serialize, JsonSchema)]
pub struct CandidateScore {
    pub label: String,
    /// The convention choices, by flag name.
    pub choices: BTreeMap<String, Value>,
    /// rms residual over every row it could compute, in the column's unit (altered rows
    /// included).
    pub rms: f64,
    /// rms residual over the rows within the tolerance of it.
    pub rms_within: f64,
    /// Median |residual|.
    pub median_abs: f64,
    /// Rows within the tolerance of this candidate.
    pub n_within: usize,
    /// A parameter was fitted to the column itself.
    pub fitted: bool,
}

/// What the audit says of one row of one column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RowVerdict {
    /// Reproduced by the best candidate.
    Best,
    /// Reproduced by another candidate (its index), not the best.
    Other(usize),
    /// Reproduced by none.
    Unexplained,
    /// The column or an input is missing in this row, or no candidate could compute it.
    NotAudited,
}

/// A row reproduced by another candidate than the best.
#[derive(Debug, Clone, Serialize, JsonSchema)]
pub struct OtherRow {
    /// Input row number (the first data row is 1).
    pub row: usize,
    pub candidate: String,
}

/// The audit of one column.
#[derive(Debug, Clone, Serialize, JsonSchema)]
pub struct ColumnAudit {
    pub column: String,
    pub quantity: Quantity,
    /// Unit of the residuals.
    pub unit: String,
    /// The convention choices of the best candidate, by flag name.
    pub best: BTreeMap<String, Value>,
    pub best_label: String,
    /// rms residual of the best candidate over the rows it reproduces.
    pub rms: f64,
    /// Largest |residual| of the best candidate over the rows it reproduces.
    pub max_abs: f64,
    /// rms residual of the best candidate over every audited row.
    pub rms_all_rows: f64,
    /// A row matches a candidate within this, in the column's unit.
    pub tolerance: f64,
    /// Rows audited (column and inputs present).
    pub n_rows: usize,
    pub n_matched: usize,
    /// Rows another candidate reproduces but the best does not.
    pub n_other: usize,
    pub n_unexplained: usize,
    pub n_not_audited: usize,
    /// Every candidate, best first.
    pub candidates: Vec<CandidateScore>,
    /// Input row numbers (the first data row is 1) that no candidate reproduces.
    pub unexplained_rows: Vec<usize>,
    pub other_rows: Vec<OtherRow>,
    /// The fitted apex of the best boost, for frame-changed columns.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fitted_apex: Option<FittedApex>,
}

fn rms(r: &[f64]) -> f64 {
    let v: Vec<f64> = r.iter().copied().filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return f64::NAN;
    }
    (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt()
}

fn median_abs(r: &[f64]) -> f64 {
    robust_scale(r) / 1.4826
}

/// Judge the candidates against the column. Returns the audit, the best candidate's
/// residual per row (NaN where not audited) and every row's verdict.
pub fn judge(
    column: &str,
    quantity: Quantity,
    target: &[f64],
    candidates: &[Candidate],
    tolerance: Option<f64>,
) -> Result<(ColumnAudit, Vec<f64>, Vec<RowVerdict>), String> {
    let residuals: Vec<Vec<f64>> = candidates
        .iter()
        .map(|c| target.iter().zip(&c.values).map(|(t, p)| t - p).collect())
        .collect();
    let stats: Vec<(f64, f64)> = residuals.iter().map(|r| (median_abs(r), rms(r))).collect();
    let order = |a: &usize, b: &usize| {
        let (ma, ra) = stats[*a];
        let (mb, rb) = stats[*b];
        ma.total_cmp(&mb).then(ra.total_cmp(&rb))
    };
    let usable: Vec<usize> = (0..candidates.len())
        .filter(|k| stats[*k].0.is_finite())
        .collect();
    let fixed = usable
        .iter()
        .copied()
        .filter(|k| !candidates[*k].fitted)
        .min_by(order);
    let fitted = usable
        .iter()
        .copied()
        .filter(|k| candidates[*k].fitted)
        .min_by(order);
    let floor = quantity.resolution();
    let best = match (fixed, fitted) {
        (Some(p), Some(f)) if stats[p].0 > floor && stats[f].0 < stats[p].0 => f,
        (Some(p), _) => p,
        (None, Some(f)) => f,
        (None, None) => {
            return Err(format!(
                "column '{column}': no candidate could recompute any row (are the inputs in reach of the cosmology?)"
            ))
        }
    };
    let tol = tolerance.unwrap_or_else(|| (5.0 * robust_scale(&residuals[best])).max(floor));
    let n = target.len();
    let verdicts: Vec<RowVerdict> = (0..n)
        .map(|i| {
            let r = residuals[best][i];
            if !target[i].is_finite() {
                return RowVerdict::NotAudited;
            }
            if r.is_finite() && r.abs() <= tol {
                return RowVerdict::Best;
            }
            let mut ranked = usable.clone();
            ranked.sort_by(order);
            if let Some(k) = ranked
                .into_iter()
                .find(|k| *k != best && residuals[*k][i].abs() <= tol)
            {
                return RowVerdict::Other(k);
            }
            if r.is_finite() {
                RowVerdict::Unexplained
            } else {
                RowVerdict::NotAudited
            }
        })
        .collect();
    let matched: Vec<f64> = (0..n)
        .filter(|i| verdicts[*i] == RowVerdict::Best)
        .map(|i| residuals[best][i])
        .collect();
    let mut ranked = usable.clone();
    ranked.sort_by(order);
    ranked.retain(|k| *k != best);
    ranked.insert(0, best);
    let scores = ranked
        .iter()
        .map(|k| CandidateScore {
            label: candidates[*k].label.clone(),
            choices: candidates[*k].choices.clone(),
            rms: stats[*k].1,
            rms_within: rms(&residuals[*k]
                .iter()
                .copied()
                .filter(|r| r.abs() <= tol)
                .collect::<Vec<_>>()),
            median_abs: stats[*k].0,
            n_within: residuals[*k].iter().filter(|r| r.abs() <= tol).count(),
            fitted: candidates[*k].fitted,
        })
        .collect();
    let count = |f: &dyn Fn(&RowVerdict) -> bool| verdicts.iter().filter(|v| f(v)).count();
    let fitted_apex = candidates[best].fitted_apex.or_else(|| {
        let boost = candidates[best].choices.get("boost");
        candidates
            .iter()
            .find(|c| c.fitted_apex.is_some() && c.choices.get("boost") == boost)
            .and_then(|c| c.fitted_apex)
    });
    let audit = ColumnAudit {
        column: column.to_string(),
        quantity,
        unit: quantity.unit().to_string(),
        best: candidates[best].choices.clone(),
        best_label: candidates[best].label.clone(),
        rms: rms(&matched),
        max_abs: matched.iter().fold(0.0, |m, r| m.max(r.abs())),
        rms_all_rows: rms(&residuals[best]),
        tolerance: tol,
        n_rows: n - count(&|v| *v == RowVerdict::NotAudited),
        n_matched: matched.len(),
        n_other: count(&|v| matches!(v, RowVerdict::Other(_))),
        n_unexplained: count(&|v| *v == RowVerdict::Unexplained),
        n_not_audited: count(&|v| *v == RowVerdict::NotAudited),
        candidates: scores,
        unexplained_rows: (0..n)
            .filter(|i| verdicts[*i] == RowVerdict::Unexplained)
            .map(|i| i + 1)
            .collect(),
        other_rows: (0..n)
            .filter_map(|i| match verdicts[i] {
                RowVerdict::Other(k) => Some(OtherRow {
                    row: i + 1,
                    candidate: candidates[k].label.clone(),
                }),
                _ => None,
            })
            .collect(),
        fitted_apex,
    };
    let mut residuals = residuals;
    let best_residuals = residuals.swap_remove(best);
    Ok((audit, best_residuals, verdicts))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cand(name: &str, values: Vec<f64>, fitted: bool) -> Candidate {
        let mut c = BTreeMap::new();
        c.insert("boost".into(), Value::String(name.into()));
        Candidate {
            label: name.into(),
            choices: c,
            values,
            fitted,
            fitted_apex: None,
        }
    }

    /// The exact candidate wins, a fitted one that is as close does not; the altered row is
    /// unexplained, the row only the other candidate reproduces is named with it.
    #[test]
    fn best_tolerance_and_rows() {
        let target = vec![100.0, 200.0, 300.0, 400.0, 900.0, 600.0, f64::NAN];
        let a = cand(
            "a",
            vec![100.0, 200.0, 300.0, 400.0, 500.0, 650.0, 1.0],
            false,
        );
        let b = cand(
            "b",
            vec![110.0, 210.0, 310.0, 410.0, 510.0, 600.0, 1.0],
            false,
        );
        let f = cand(
            "f",
            vec![100.0, 200.0, 300.0, 400.0, 500.0, 650.0, 1.0],
            true,
        );
        let (audit, r, v) = judge("cz_cmb", Quantity::CzCmb, &target, &[f, a, b], None).unwrap();
        assert_eq!(audit.best_label, "a");
        assert_eq!(audit.unexplained_rows, vec![5]);
        assert_eq!(audit.other_rows.len(), 1);
        assert_eq!(audit.other_rows[0].row, 6);
        assert_eq!(audit.n_not_audited, 1);
        assert_eq!(audit.n_rows, 6);
        assert_eq!(v[6], RowVerdict::NotAudited);
        assert_eq!(r[4], 400.0);
        assert_eq!(audit.tolerance, 1.0);
    }
}
