//! Benchmarks (criterion): `cargo bench --bench pipeline`.
//!
//! Throughput of the hot paths on generated data: distance inversion, the per-row
//! derivation, the columnar pipeline over a mock catalogue, and Monte Carlo draws. The
//! end-to-end figures on a 10⁶-row catalogue (read, compute, write) are measured with the
//! command in README.md, "Speed".

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use flowsift::mock::{generate, MockSpec};
use flowsift::physics::cosmology::{Cosmology, CosmologyParams, LengthUnit};
use flowsift::physics::estimators::{DistanceKind, DlConvention, EstimatorOptions};
use flowsift::physics::object::ObjectContext;
use flowsift::physics::restframe::{default_apex, Boost, BoostMethod};
use flowsift::physics::sky::SkyRotations;
use flowsift::pipeline::{derive, montecarlo, InputColumns};

fn inputs(n: usize) -> (Cosmology, InputColumns<'static>) {
    let cosmology = Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3)).unwrap();
    let spec = MockSpec {
        n,
        ..MockSpec::demo_survey()
    };
    let cmb = Boost::new(&default_apex("cmb")).unwrap();
    let m = generate(&spec, &cosmology, &cmb, DlConvention::Observed).unwrap();
    let input = InputColumns {
        ra_deg: m.ra.into(),
        dec_deg: m.dec.into(),
        z_helio: m.z_helio.into(),
        z_err: m.z_err.into(),
        distance: m.mu.into(),
        distance_err: m.mu_err.into(),
        distance_kind: DistanceKind::Mu,
        status: vec![0; n],
        error_missing: vec![false; n],
    };
    (cosmology, input)
}

fn benches(c: &mut Criterion) {
    let cosmology = Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3)).unwrap();
    let targets: Vec<f64> = (0..10_000).map(|i| 10.0 + i as f64 * 0.4).collect();
    let mut g = c.benchmark_group("inversion");
    g.throughput(Throughput::Elements(targets.len() as u64));
    g.bench_function("z_from_comoving", |b| {
        b.iter(|| {
            targets
                .iter()
                .map(|d| cosmology.z_from_comoving(*d).unwrap())
                .sum::<f64>()
        })
    });
    g.bench_function("z_from_luminosity", |b| {
        b.iter(|| {
            targets
                .iter()
                .map(|d| cosmology.z_from_luminosity(*d).unwrap())
                .sum::<f64>()
        })
    });
    g.finish();

    let mut g = c.benchmark_group("pipeline");
    g.sample_size(10);
    for n in [10_000usize, 100_000] {
        let (cosmo, input) = inputs(n);
        let ctx = ObjectContext {
            cosmology: &cosmo,
            rotations: SkyRotations::default(),
            cmb: Boost::new(&default_apex("cmb")).unwrap(),
            method: BoostMethod::Exact,
            options: EstimatorOptions::default(),
            length_unit: LengthUnit::Mpc,
        };
        g.throughput(Throughput::Elements(n as u64));
        g.bench_with_input(BenchmarkId::new("derive", n), &n, |b, _| {
            b.iter(|| derive(&ctx, &input, &|_| {}))
        });
        if n == 10_000 {
            g.throughput(Throughput::Elements((n * 1000) as u64));
            g.bench_with_input(BenchmarkId::new("monte_carlo_1000_draws", n), &n, |b, _| {
                b.iter(|| montecarlo::run(&ctx, &input, &input.status, 1000, 7, 0, &|_| {}))
            });
        }
    }
    g.finish();
}

criterion_group!(pipeline, benches);
criterion_main!(pipeline);
