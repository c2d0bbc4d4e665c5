//! Malmquist bias corrections for log-normal distance errors.
//!
//! A distance indicator with log-normal scatter Δ = σ_lnd gives, for an object at true
//! distance r, an estimate d with P(ln d | r) Gaussian of mean ln r and width Δ. Objects
//! scattered from the larger volume at larger r outnumber those from smaller r, so the
//! expected true distance given d exceeds d. With a radial number density n(r) of the parent
//! population,
//!
//! E[r | d] = ∫ r³ n(r) P(d|r) dr / ∫ r² n(r) P(d|r) dr            (general form)
//!
//! (Lynden-Bell et al. 1988, ApJ 326, 19; reviewed by Strauss & Willick 1995, Phys. Rep.
//! 261, 271). For a homogeneous population (n constant) the integrals are Gaussian and
//! E[r | d] = d exp(3.5 Δ²) exactly: with x = ln r and μ = ln d, r³ dr = e^{4x} dx and
//! r² dr = e^{3x} dx, and ∫ e^{kx} e^{−(x−μ)²/2Δ²} dx ∝ e^{kμ + k²Δ²/2}, so the ratio is
//! d e^{(16 − 9)Δ²/2} = d e^{3.5Δ²}.
//!
//! Assumptions: the scatter is log-normal with known Δ; the sample is selected on distance
//! only through n(r) (no magnitude limit); r is a distance in a Euclidean, low-redshift
//! sense, so the correction is a factor on the measured distance.

/// Homogeneous Malmquist correction for log-normal distance errors: the factor
/// E[r|d]/d = exp(3.5 Δ²), Δ = σ_lnd.
/// Source: Lynden-Bell et al. (1988), ApJ 326, 19.
pub fn homogeneous_malmquist_factor(sigma_ln_d: f64) -> f64 {
    (3.5 * sigma_ln_d * sigma_ln_d).exp()
}

/// A radial number-density profile n(r), tabulated; linear between points, and held at
/// the end values outside the table.
#[derive(Debug, Clone, PartialEq)]
pub struct RadialProfile {
    r: Vec<f64>,
    n: Vec<f64>,
}

impl RadialProfile {
    /// From increasing, positive radii and non-negative densities (at least two points).
    pub fn new(r: Vec<f64>, n: Vec<f64>) -> Result<Self, String> {
        if r.len() != n.len() || r.len() < 2 {
            return Err("a density profile needs at least two (r, n) points".into());
        }
        for i in 0..r.len() {
            if !(r[i].is_finite() && r[i] > 0.0) {
                return Err(format!(
                    "profile point {}: radius {} is not a positive number",
                    i + 1,
                    r[i]
                ));
            }
            if !(n[i].is_finite() && n[i] >= 0.0) {
                return Err(format!(
                    "profile point {}: density {} is not a non-negative number",
                    i + 1,
                    n[i]
                ));
            }
            if i > 0 && r[i] <= r[i - 1] {
                return Err(format!(
                    "profile point {}: radii must increase ({} after {})",
                    i + 1,
                    r[i],
                    r[i - 1]
                ));
            }
        }
        if n.iter().all(|v| *v == 0.0) {
            return Err("the density profile is zero everywhere".into());
        }
        Ok(Self { r, n })
    }

    /// A constant profile (homogeneous population).
    pub fn uniform() -> Self {
        Self {
            r: vec![1e-6, 1e9],
            n: vec![1.0, 1.0],
        }
    }

    /// n(r).
    pub fn density(&self, r: f64) -> f64 {
        if r <= self.r[0] {
            return self.n[0];
        }
        let last = self.r.len() - 1;
        if r >= self.r[last] {
            return self.n[last];
        }
        let i = self.r.partition_point(|x| *x <= r) - 1;
        let t = (r - self.r[i]) / (self.r[i + 1] - self.r[i]);
        self.n[i] + t * (self.n[i + 1] - self.n[i])
    }
}

/// Homogeneous Malmquist correction of a logarithmic distance (ln D, η, μ as a log):
/// E[ln r | d] − ln d = 3 Δ², Δ = σ_lnd. The posterior of x = ln r is ∝ e^{3x} times the
/// Gaussian of the measurement, a Gaussian shifted by 3Δ² — the derivation of Lynden-Bell et
/// al. (1988), ApJ 326, 19, taken in ln r (their E[r|d] = d exp(3.5Δ²) is the mean of e^x over
/// the same posterior, exp(3Δ² + Δ²/2)). For η = log10(D_C(z)/r) the shift is −3Δ²/ln 10.
pub fn homogeneous_malmquist_log_shift(sigma_ln_d: f64) -> f64 {
    3.0 * sigma_ln_d * sigma_ln_d
}

/// The general (inhomogeneous) Malmquist correction: the factor E[r|d]/d for a measured
/// distance d with log-normal scatter Δ and parent density `profile`.
/// Source: Lynden-Bell et al. (1988), ApJ 326, 19; Strauss & Willick (1995), Phys. Rep. 261,
/// 271. Integrated over x = ln r on [ln d − 12Δ, ln d + 12Δ] by composite Simpson with 1200
/// intervals.
pub fn malmquist_factor(d: f64, sigma_ln_d: f64, profile: &RadialProfile) -> Option<f64> {
    posterior_moments(d, sigma_ln_d, profile).map(|m| m.0)
}

/// The general correction of a logarithmic distance: E[ln r | d] − ln d =
/// ∫ ln(r/d) r² n(r) P(d|r) dr / ∫ r² n(r) P(d|r) dr, by the same quadrature as
/// [`malmquist_factor`] (Lynden-Bell et al. 1988; Strauss & Willick 1995).
pub fn malmquist_log_shift(d: f64, sigma_ln_d: f64, profile: &RadialProfile) -> Option<f64> {
    posterior_moments(d, sigma_ln_d, profile).map(|m| m.1)
}

/// (E[r/d], E[ln(r/d)]) over the posterior of r given the measured d.
fn posterior_moments(d: f64, sigma_ln_d: f64, profile: &RadialProfile) -> Option<(f64, f64)> {
    if !(d > 0.0 && sigma_ln_d >= 0.0) {
        return None;
    }
    if sigma_ln_d == 0.0 {
        return Some((1.0, 0.0));
    }
    let ln_d = d.ln();
    let (a, b) = (ln_d - 12.0 * sigma_ln_d, ln_d + 12.0 * sigma_ln_d);
    let m = 1200;
    let h = (b - a) / m as f64;
    let (mut num, mut num_log, mut den) = (0.0, 0.0, 0.0);
    for i in 0..=m {
        let x = a + i as f64 * h;
        let w = if i == 0 || i == m {
            1.0
        } else if i % 2 == 1 {
            4.0
        } else {
            2.0
        };
        let r = x.exp();
        let g = (-(x - ln_d).powi(2) / (2.0 * sigma_ln_d * sigma_ln_d)).exp();
        // dr = r dx: r³ dr → r⁴ dx, r² dr → r³ dx; work relative to d to keep numbers tame.
        let rr = r / d;
        let base = w * profile.density(r) * g * rr * rr * rr;
        num += base * rr;
        num_log += base * (x - ln_d);
        den += base;
    }
    (den > 0.0).then(|| (num / den, num_log / den))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The general form with n = constant reproduces d exp(3.5 Δ²) (Lynden-Bell et al.
    /// 1988): a check of the quadrature against the published closed form.
    #[test]
    fn general_form_reduces_to_homogeneous() {
        for delta in [0.05, 0.2, 0.35, 0.5] {
            let f = malmquist_factor(80.0, delta, &RadialProfile::uniform()).unwrap();
            let h = homogeneous_malmquist_factor(delta);
            assert!((f / h - 1.0).abs() < 1e-9, "Δ = {delta}: {f} vs {h}");
        }
    }

    /// The log-space mean with n = constant is ln d + 3Δ² (the closed form above), and the
    /// two moments agree with each other: E[r]/d = exp(3Δ² + Δ²/2) for a Gaussian in ln r.
    #[test]
    fn log_shift_reduces_to_three_delta_squared() {
        for delta in [0.05, 0.2, 0.35] {
            let s = malmquist_log_shift(80.0, delta, &RadialProfile::uniform()).unwrap();
            assert!((s / homogeneous_malmquist_log_shift(delta) - 1.0).abs() < 1e-9);
            assert!(
                (homogeneous_malmquist_factor(delta).ln() - s - 0.5 * delta * delta).abs() < 1e-9
            );
        }
    }

    /// For 20% distances (Δ = 0.2) the homogeneous correction is exp(0.14) = 1.1503
    /// (arithmetic on the published formula).
    #[test]
    fn twenty_percent_distances() {
        assert!((homogeneous_malmquist_factor(0.2) - 0.14f64.exp()).abs() < 1e-15);
    }

    /// A density that rises with r pushes the expected distance further out than a
    /// homogeneous one; a falling one pulls it in.
    #[test]
    fn gradients_shift_the_correction() {
        let rising = RadialProfile::new(vec![10.0, 200.0], vec![0.1, 10.0]).unwrap();
        let falling = RadialProfile::new(vec![10.0, 200.0], vec![10.0, 0.1]).unwrap();
        let h = homogeneous_malmquist_factor(0.2);
        assert!(malmquist_factor(80.0, 0.2, &rising).unwrap() > h);
        assert!(malmquist_factor(80.0, 0.2, &falling).unwrap() < h);
    }

    #[test]
    fn profile_validation() {
        assert!(RadialProfile::new(vec![1.0], vec![1.0]).is_err());
        assert!(RadialProfile::new(vec![2.0, 1.0], vec![1.0, 1.0]).is_err());
        assert!(RadialProfile::new(vec![1.0, 2.0], vec![-1.0, 1.0]).is_err());
    }
}
