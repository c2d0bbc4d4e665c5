//! Benchmark (criterion) of the ΛCDM bulk-flow expectation: `cargo bench --bench lcdm_window`.
//!
//! All-sky samples to 150 h⁻¹ Mpc (z ≈ 0.05) with maximum-likelihood weights, 2 × 10⁴ and
//! 8 × 10⁴ objects, through the automatic choice the `bulk-flow` stage uses
//! (`lcdm_bulk_flow_covariance_auto`: the FFT mesh at these sizes), and the exact pair sum
//! at 2 × 10⁴ for comparison. README.md, "Speed", gives the ratios.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use flowsift::physics::power::{
    lcdm_bulk_flow_covariance_auto, lcdm_bulk_flow_covariance_by_separation, LinearPower,
    PowerParams,
};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// `n` objects uniform in volume within 150 h⁻¹ Mpc, thinned by e^{−r/80}, with ML weights
/// for 20 % distance errors (2.5 h⁻¹ Mpc floor).
fn sample(n: usize) -> (Vec<[f64; 3]>, Vec<[f64; 3]>) {
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let mut pos: Vec<[f64; 3]> = Vec::with_capacity(n);
    let mut inv_var = Vec::with_capacity(n);
    while pos.len() < n {
        let r = 150.0 * rng.random::<f64>().cbrt();
        if rng.random::<f64>() > (-r / 80.0).exp() {
            continue;
        }
        let mu = 2.0 * rng.random::<f64>() - 1.0;
        let phi = 2.0 * std::f64::consts::PI * rng.random::<f64>();
        let s = (1.0 - mu * mu).sqrt();
        pos.push([r * s * phi.cos(), r * s * phi.sin(), r * mu]);
        inv_var.push(1.0 / (0.2 * r).hypot(2.5).powi(2));
    }
    let units: Vec<nalgebra::Vector3<f64>> = pos
        .iter()
        .map(|r| nalgebra::Vector3::new(r[0], r[1], r[2]).normalize())
        .collect();
    let a = units
        .iter()
        .zip(&inv_var)
        .fold(nalgebra::Matrix3::zeros(), |m, (u, iv)| {
            m + u * u.transpose() * *iv
        });
    let inv = a.try_inverse().expect("invertible");
    let w = units
        .iter()
        .zip(&inv_var)
        .map(|(u, iv)| {
            let w = inv * u * *iv;
            [w[0], w[1], w[2]]
        })
        .collect();
    (pos, w)
}

fn benches(c: &mut Criterion) {
    let power = LinearPower::new(PowerParams::planck2018());
    let mut g = c.benchmark_group("lcdm_expectation");
    g.sample_size(10);
    for n in [20_000usize, 80_000] {
        let (pos, w) = sample(n);
        g.bench_with_input(BenchmarkId::new("auto", n), &n, |b, _| {
            b.iter(|| lcdm_bulk_flow_covariance_auto(&power, 0.52, &pos, &w))
        });
    }
    let (pos, w) = sample(20_000);
    g.bench_with_input(
        BenchmarkId::new("exact_pair_sum", 20_000),
        &20_000,
        |b, _| b.iter(|| lcdm_bulk_flow_covariance_by_separation(&power, 0.52, &pos, &w)),
    );
    g.finish();
}

criterion_group!(lcdm, benches);
criterion_main!(lcdm);
