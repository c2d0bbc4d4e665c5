//! Chebyshev interpolation of a smooth function on an interval, for evaluating an expensive
//! function (an exact distance inversion) many times over a narrow range.
//! Method: Press et al., Numerical Recipes (3rd ed., 2007), §5.8, "Chebyshev
//! Approximation" — coefficients from the values at the Chebyshev nodes, evaluation by
//! Clenshaw's recurrence.

/// cos(j θ_k) for the n Chebyshev nodes θ_k = π(k + ½)/n, j, k < n.
#[derive(Debug, Clone)]
pub struct ChebyshevNodes {
    n: usize,
    cos: Vec<f64>,
}

impl ChebyshevNodes {
    pub fn new(n: usize) -> Self {
        let n = n.max(2);
        let mut cos = vec![0.0; n * n];
        for j in 0..n {
            for k in 0..n {
                cos[j * n + k] =
                    (j as f64 * std::f64::consts::PI * (k as f64 + 0.5) / n as f64).cos();
            }
        }
        Self { n, cos }
    }
}

/// A Chebyshev interpolant on [a, b].
#[derive(Debug, Clone)]
pub struct Chebyshev {
    a: f64,
    b: f64,
    coefficients: Vec<f64>,
}

impl Chebyshev {
    /// Interpolate `f` at `n` Chebyshev nodes on [a, b]. Fails with the first error of `f`.
    pub fn fit<E>(
        a: f64,
        b: f64,
        n: usize,
        mut f: impl FnMut(f64) -> Result<f64, E>,
    ) -> Result<Self, E> {
        Self::fit_with(&ChebyshevNodes::new(n), a, b, &mut f)
    }

    /// As [`Chebyshev::fit`], with the node cosines precomputed once for many fits.
    pub fn fit_with<E>(
        nodes: &ChebyshevNodes,
        a: f64,
        b: f64,
        f: &mut impl FnMut(f64) -> Result<f64, E>,
    ) -> Result<Self, E> {
        let n = nodes.n;
        let (half, mid) = (0.5 * (b - a), 0.5 * (b + a));
        let mut values = Vec::with_capacity(n);
        for k in 0..n {
            values.push(f(mid + half * nodes.cos[n + k])?);
        }
        let coefficients = (0..n)
            .map(|j| {
                let row = &nodes.cos[j * n..(j + 1) * n];
                let s: f64 = values.iter().zip(row).map(|(v, c)| v * c).sum();
                2.0 * s / n as f64
            })
            .collect();
        Ok(Self { a, b, coefficients })
    }

    /// The interpolant at x (Clenshaw's recurrence); meaningful for x in [a, b].
    #[inline]
    pub fn eval(&self, x: f64) -> f64 {
        if self.b == self.a {
            return 0.5 * self.coefficients[0];
        }
        let y = (2.0 * x - self.a - self.b) / (self.b - self.a);
        let y2 = 2.0 * y;
        let (mut d, mut dd) = (0.0, 0.0);
        for c in self.coefficients[1..].iter().rev() {
            let t = d;
            d = y2 * d - dd + c;
            dd = t;
        }
        y * d - dd + 0.5 * self.coefficients[0]
    }

    /// [`Chebyshev::eval`] at every element of `xs`, into `out` (same arithmetic, so the
    /// same results). The recurrence runs on several points at once: one point's recurrence
    /// is a chain of dependent operations, several independent chains keep the processor's
    /// pipelines (and vector lanes) full.
    pub fn eval_into(&self, xs: &[f64], out: &mut [f64]) {
        const LANES: usize = 8;
        assert_eq!(xs.len(), out.len(), "one output per point");
        if self.b == self.a {
            out.fill(0.5 * self.coefficients[0]);
            return;
        }
        let (a, b, c0) = (self.a, self.b, 0.5 * self.coefficients[0]);
        let tail = &self.coefficients[1..];
        let mut x_chunks = xs.chunks_exact(LANES);
        let mut out_chunks = out.chunks_exact_mut(LANES);
        for (x, o) in (&mut x_chunks).zip(&mut out_chunks) {
            let mut y = [0.0; LANES];
            for k in 0..LANES {
                y[k] = (2.0 * x[k] - a - b) / (b - a);
            }
            let (mut d, mut dd) = ([0.0; LANES], [0.0; LANES]);
            for c in tail.iter().rev() {
                for k in 0..LANES {
                    let t = d[k];
                    d[k] = 2.0 * y[k] * d[k] - dd[k] + c;
                    dd[k] = t;
                }
            }
            for k in 0..LANES {
                o[k] = y[k] * d[k] - dd[k] + c0;
            }
        }
        for (x, o) in x_chunks.remainder().iter().zip(out_chunks.into_remainder()) {
            *o = self.eval(*x);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// exp on [0, 3] with 20 nodes: the Chebyshev series of exp converges like 1.5^n/n!
    /// (Numerical Recipes §5.8), far below 1e-13 here.
    #[test]
    fn interpolates_exp() {
        let c = Chebyshev::fit(0.0, 3.0, 20, |x| Ok::<f64, ()>(x.exp())).unwrap();
        for i in 0..=100 {
            let x = 3.0 * i as f64 / 100.0;
            assert!((c.eval(x) - x.exp()).abs() < 1e-13 * x.exp(), "{x}");
        }
    }

    /// The batched evaluation gives bit-identical values to the scalar one, including the
    /// remainder that does not fill a batch.
    #[test]
    fn batched_equals_scalar() {
        let c = Chebyshev::fit(-1.0, 2.5, 17, |x| Ok::<f64, ()>((0.3 * x).sin() + x * x)).unwrap();
        let xs: Vec<f64> = (0..29).map(|i| -1.0 + 3.5 * i as f64 / 28.0).collect();
        let mut out = vec![0.0; xs.len()];
        c.eval_into(&xs, &mut out);
        for (x, o) in xs.iter().zip(&out) {
            assert_eq!(o.to_bits(), c.eval(*x).to_bits(), "{x}");
        }
    }

    #[test]
    fn degenerate_interval() {
        let c = Chebyshev::fit(1.0, 1.0, 5, |x| Ok::<f64, ()>(x * 2.0)).unwrap();
        assert!((c.eval(1.0) - 2.0).abs() < 1e-15);
    }
}
