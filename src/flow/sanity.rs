//! The sample check printed after every `velocities` run: is the result plausible for the
//! inputs as stated? The median and robust scatter of v_pec, the share of objects whose
//! |v_pec| exceeds three times its error, and the monopole (error-weighted mean η). A median
//! far from zero is the signature of a wrong distance kind or unit, or of an H0 that does
//! not match the distances' zero point, and is named as such.

use serde::Serialize;

/// The normal-consistency factor of the median absolute deviation, 1/Φ⁻¹(3/4): σ ≈ 1.4826 ×
/// MAD for Gaussian data (common practice; checked against statrs in the tests).
pub const MAD_TO_SIGMA: f64 = 1.482_602_218_505_602;
/// The standard error of the median of n Gaussian values is √(π/2) σ/√n for large n (the
/// asymptotic variance πσ²/(2n) of the sample median; a handbook result).
pub const MEDIAN_SE_FACTOR: f64 = 1.253_314_137_315_500_3;
/// The share of a Gaussian beyond ±3σ, 2(1 − Φ(3)) (checked against statrs in the tests).
pub const GAUSSIAN_BEYOND_3_SIGMA: f64 = 0.002_699_796_063_260_2;
/// |median v_pec| above this many standard errors plus [`MEDIAN_SLACK_KM_S`] is implausible.
pub const MEDIAN_LIMIT_SE: f64 = 3.0;
/// Allowance for a genuine net flow or a zero-point offset, km/s (our own choice: well above
/// any measured bulk flow, well below the km/s-thousands a wrong unit gives).
pub const MEDIAN_SLACK_KM_S: f64 = 1000.0;

/// What the sample check found.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SampleCheck {
    /// Rows used (status ok, finite v_pec).
    pub n: usize,
    pub median_v_pec: f64,
    /// Standard error of the median, √(π/2) σ_R/√n.
    pub median_v_pec_se: f64,
    /// Robust scatter 1.4826 × MAD of v_pec, km/s.
    pub robust_scatter_v_pec: f64,
    pub median_eta: f64,
    pub robust_scatter_eta: f64,
    /// Share of the rows with a finite positive error whose |v_pec| exceeds 3 σ.
    pub share_beyond_3_sigma: f64,
    /// Error-weighted mean η and its error (NaN when no row has an η error).
    pub monopole_eta: f64,
    pub monopole_eta_err: f64,
    /// Warnings, each naming the likely cause and the flag.
    pub warnings: Vec<String>,
}

fn median(sorted: &[f64]) -> f64 {
    let n = sorted.len();
    if n % 2 == 1 {
        sorted[n / 2]
    } else {
        0.5 * (sorted[n / 2 - 1] + sorted[n / 2])
    }
}

/// Median and 1.4826 × MAD of the finite values.
fn robust(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let mut v: Vec<f64> = values.filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let m = median(&v);
    let mut dev: Vec<f64> = v.iter().map(|x| (x - m).abs()).collect();
    dev.sort_by(f64::total_cmp);
    Some((m, MAD_TO_SIGMA * median(&dev)))
}

/// The check over the rows marked `ok`. None when no row is usable or the columns differ
/// in length.
pub fn check_sample(
    v_pec: &[f64],
    v_pec_err: &[f64],
    eta: &[f64],
    eta_err: &[f64],
    ok: &[bool],
) -> Option<SampleCheck> {
    let mut tally = SampleTally::default();
    tally.add(v_pec, v_pec_err, eta, eta_err, ok)?;
    tally.finish()
}

/// The sample check gathered a block of rows at a time (a catalogue read in blocks): the
/// values the medians need, and running sums for the rest, added in row order so that the
/// result is the same, bit for bit, as one [`check_sample`] over all rows. It holds two
/// numbers (16 bytes) per usable row.
#[derive(Debug, Clone, Default)]
pub struct SampleTally {
    v_pec: Vec<f64>,
    eta: Vec<f64>,
    with_err: usize,
    beyond_3_sigma: usize,
    sum_w: f64,
    sum_wx: f64,
}

impl SampleTally {
    /// Add the rows of one block; None (and nothing added) when its columns differ in length.
    pub fn add(
        &mut self,
        v_pec: &[f64],
        v_pec_err: &[f64],
        eta: &[f64],
        eta_err: &[f64],
        ok: &[bool],
    ) -> Option<()> {
        let n_rows = v_pec.len();
        if [v_pec_err.len(), eta.len(), eta_err.len(), ok.len()]
            .iter()
            .any(|&len| len != n_rows)
        {
            return None;
        }
        for i in (0..n_rows).filter(|&i| ok[i] && v_pec[i].is_finite()) {
            self.v_pec.push(v_pec[i]);
            self.eta.push(eta[i]);
            if v_pec_err[i].is_finite() && v_pec_err[i] > 0.0 {
                self.with_err += 1;
                if v_pec[i].abs() > 3.0 * v_pec_err[i] {
                    self.beyond_3_sigma += 1;
                }
            }
            let e = eta_err[i];
            if eta[i].is_finite() && e.is_finite() && e > 0.0 {
                self.sum_w += 1.0 / (e * e);
                self.sum_wx += eta[i] / (e * e);
            }
        }
        Some(())
    }

    /// The check over every row added; None when no row was usable.
    pub fn finish(self) -> Option<SampleCheck> {
        let n = self.v_pec.len();
        let (median_v_pec, robust_scatter_v_pec) = robust(self.v_pec.into_iter())?;
        let (median_eta, robust_scatter_eta) =
            robust(self.eta.into_iter()).unwrap_or((f64::NAN, f64::NAN));
        let median_v_pec_se = MEDIAN_SE_FACTOR * robust_scatter_v_pec / (n as f64).sqrt();
        let share_beyond_3_sigma = if self.with_err == 0 {
            f64::NAN
        } else {
            self.beyond_3_sigma as f64 / self.with_err as f64
        };
        let (monopole_eta, monopole_eta_err) = if self.sum_w > 0.0 {
            (self.sum_wx / self.sum_w, 1.0 / self.sum_w.sqrt())
        } else {
            (f64::NAN, f64::NAN)
        };
        let mut warnings = vec![];
        if median_v_pec.abs() > MEDIAN_LIMIT_SE * median_v_pec_se + MEDIAN_SLACK_KM_S {
            warnings.push(format!(
                "the median v_pec is {:+.0} ± {:.0} km/s over {n} objects: peculiar velocities \
                 average near zero, so the distances are very likely misread. Check what the \
                 distance column holds (--distance-kind: mu, dl, dc, da or eta) and its unit \
                 (--length-unit, or the column's unit card: a distance modulus read as a length \
                 gives thousands of km/s), and that H0 (--h0 or --preset) matches the distances' \
                 zero point.",
                median_v_pec, median_v_pec_se
            ));
        }
        Some(SampleCheck {
            n,
            median_v_pec,
            median_v_pec_se,
            robust_scatter_v_pec,
            median_eta,
            robust_scatter_eta,
            share_beyond_3_sigma,
            monopole_eta,
            monopole_eta_err,
            warnings,
        })
    }
}

impl SampleCheck {
    /// One line for the run's summary.
    pub fn line(&self) -> String {
        format!(
            "sample check ({} objects): median v_pec {:+.0} ± {:.0} km/s, robust scatter \
             {:.0} km/s (1.4826 × MAD); {:.1}% beyond 3σ (0.27% for Gaussian errors); \
             monopole η = {:+.4} ± {:.4}",
            self.n,
            self.median_v_pec,
            self.median_v_pec_se,
            self.robust_scatter_v_pec,
            100.0 * self.share_beyond_3_sigma,
            self.monopole_eta,
            self.monopole_eta_err
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use statrs::distribution::{ContinuousCDF, Normal};

    /// The Gaussian constants against statrs's normal distribution.
    #[test]
    fn gaussian_constants_match_statrs() {
        let n = Normal::new(0.0, 1.0).unwrap();
        assert!((MAD_TO_SIGMA - 1.0 / n.inverse_cdf(0.75)).abs() < 1e-12);
        assert!((GAUSSIAN_BEYOND_3_SIGMA - 2.0 * (1.0 - n.cdf(3.0))).abs() < 1e-12);
        assert!((MEDIAN_SE_FACTOR - (std::f64::consts::PI / 2.0).sqrt()).abs() < 1e-15);
    }

    #[test]
    fn median_scatter_monopole_and_warning() {
        // Five values: median 0, deviations 0,100,100,200,200 → MAD 100.
        let v = [-200.0, -100.0, 0.0, 100.0, 200.0, f64::NAN];
        let e = [50.0, 50.0, 50.0, 50.0, 50.0, 50.0];
        let eta = [0.01, -0.01, 0.0, 0.02, -0.02, 0.0];
        let eta_err = [0.1, 0.1, 0.1, 0.1, 0.1, 0.1];
        let ok = [true, true, true, true, true, true];
        let c = check_sample(&v, &e, &eta, &eta_err, &ok).unwrap();
        assert_eq!(c.n, 5);
        assert_eq!(c.median_v_pec, 0.0);
        assert!((c.robust_scatter_v_pec - 148.2602218505602).abs() < 1e-9);
        assert!((c.share_beyond_3_sigma - 0.4).abs() < 1e-12);
        assert!(c.monopole_eta.abs() < 1e-15);
        assert!((c.monopole_eta_err - 0.1 / 5f64.sqrt()).abs() < 1e-15);
        assert!(c.warnings.is_empty());
        let far: Vec<f64> = v.iter().map(|x| x + 3700.0).collect();
        let c = check_sample(&far, &e, &eta, &eta_err, &ok).unwrap();
        assert_eq!(c.warnings.len(), 1, "{:?}", c.warnings);
        assert!(c.warnings[0].contains("--distance-kind"));
        assert!(check_sample(&[], &[], &[], &[], &[]).is_none());
        assert!(check_sample(&v, &e[..2], &eta, &eta_err, &ok).is_none());
    }
}
