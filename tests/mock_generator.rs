//! The mock generator: reproducibility, exact recovery of the truth without errors, and the
//! statistics of what it draws.

use flowsift::mock::{generate, DistanceError, MockCatalogue, MockError, MockSpec, Population};
use flowsift::physics::cosmology::{Cosmology, CosmologyParams};
use flowsift::physics::estimators::{
    peculiar_velocity, Distance, DistanceKind, DlConvention, EstimatorOptions, Observation,
};
use flowsift::physics::redshift::{Cmb, Heliocentric, Redshift};
use flowsift::physics::restframe::{default_apex, Boost};
use flowsift::physics::sky::{Direction, Galactic, Icrs, SkyRotations};
use nalgebra::{Matrix3, Vector3};

const CONVENTIONS: [DlConvention; 3] = [
    DlConvention::Observed,
    DlConvention::Cosmological,
    DlConvention::Full,
];

fn cosmology() -> Cosmology {
    Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3)).unwrap()
}

fn cmb() -> Boost<Cmb> {
    Boost::<Cmb>::new(&default_apex("cmb")).unwrap()
}

fn make(spec: &MockSpec, convention: DlConvention) -> MockCatalogue {
    generate(spec, &cosmology(), &cmb(), convention).unwrap()
}

/// A small spec with every error switched off.
fn noiseless(n: usize) -> MockSpec {
    MockSpec {
        name: "noiseless test".into(),
        n,
        seed: 7,
        bulk_flow: [-150.0, 320.0, 90.0],
        sigma_v: 0.0,
        z_min: 0.003,
        z_max: 0.1,
        zone_of_avoidance_deg: None,
        z_err: 0.0,
        populations: vec![
            Population {
                name: "a".into(),
                fraction: 1.0,
                distance_error: DistanceError::Fractional(0.0),
            },
            Population {
                name: "b".into(),
                fraction: 1.0,
                distance_error: DistanceError::Magnitudes(0.0),
            },
        ],
        outlier_fraction: 0.0,
        outlier_offset_mag: [2.5, 4.0],
    }
}

/// Binomial σ of a fraction: sqrt(p(1 − p)/N) (binomial variance).
fn binomial_sigma(p: f64, n: usize) -> f64 {
    (p * (1.0 - p) / n as f64).sqrt()
}

fn bits(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| x.to_bits()).collect()
}

fn assert_bit_identical(a: &MockCatalogue, b: &MockCatalogue) {
    let pairs: [(&str, &[f64], &[f64]); 13] = [
        ("ra", &a.ra, &b.ra),
        ("dec", &a.dec, &b.dec),
        ("z_helio", &a.z_helio, &b.z_helio),
        ("z_err", &a.z_err, &b.z_err),
        ("mu", &a.mu, &b.mu),
        ("mu_err", &a.mu_err, &b.mu_err),
        ("true_z_cos", &a.true_z_cos, &b.true_z_cos),
        ("true_v_pec", &a.true_v_pec, &b.true_v_pec),
        ("true_z_cmb", &a.true_z_cmb, &b.true_z_cmb),
        ("true_z_helio", &a.true_z_helio, &b.true_z_helio),
        ("true_d_c", &a.true_d_c, &b.true_d_c),
        ("true_mu", &a.true_mu, &b.true_mu),
        (
            "n_galactic",
            a.n_galactic.as_flattened(),
            b.n_galactic.as_flattened(),
        ),
    ];
    for (name, x, y) in pairs {
        assert_eq!(bits(x), bits(y), "column {name} differs");
    }
    assert_eq!(a.population, b.population);
}

/// (1) The same seed gives bit-identical catalogues whatever the rayon thread count,
/// because each object draws from its own ChaCha stream.
#[test]
fn same_seed_same_catalogue_any_thread_count() {
    let spec = MockSpec::demo_survey();
    let in_pool = |k: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(k)
            .build()
            .unwrap()
            .install(|| make(&spec, DlConvention::Observed))
    };
    let one = in_pool(1);
    let two = in_pool(2);
    assert_eq!(one.len(), spec.n);
    assert_bit_identical(&one, &two);
    assert_bit_identical(&one, &make(&spec, DlConvention::Observed));

    // A different seed gives a different catalogue.
    let other = make(
        &MockSpec {
            seed: spec.seed + 1,
            ..spec.clone()
        },
        DlConvention::Observed,
    );
    assert_ne!(bits(&one.ra), bits(&other.ra));
}

/// Switching errors off leaves the truth unchanged (all draws are made regardless), and the
/// reported values then equal the true ones.
#[test]
fn errors_do_not_change_truth() {
    let noisy = MockSpec {
        n: 400,
        ..MockSpec::demo_survey()
    };
    let mut quiet = noisy.clone();
    quiet.z_err = 0.0;
    quiet.outlier_fraction = 0.0;
    for p in &mut quiet.populations {
        p.distance_error = match p.distance_error {
            DistanceError::Fractional(_) => DistanceError::Fractional(0.0),
            DistanceError::Magnitudes(_) => DistanceError::Magnitudes(0.0),
        };
    }
    let a = make(&noisy, DlConvention::Observed);
    let b = make(&quiet, DlConvention::Observed);
    assert_eq!(bits(&a.true_v_pec), bits(&b.true_v_pec));
    assert_eq!(bits(&a.true_mu), bits(&b.true_mu));
    assert_eq!(bits(&a.true_z_helio), bits(&b.true_z_helio));
    assert_eq!(a.population, b.population);
    assert_eq!(bits(&b.mu), bits(&b.true_mu));
    assert_eq!(bits(&b.z_helio), bits(&b.true_z_helio));
    assert_ne!(bits(&a.mu), bits(&a.true_mu));
}

/// Injected outliers: the stated fraction (binomial 4σ) with offsets of the stated size;
/// the truth columns are those of the same mock without outliers (the extra draws come
/// after the others).
#[test]
fn injected_outliers() {
    let spec = MockSpec {
        n: 5000,
        outlier_fraction: 0.05,
        ..MockSpec::demo_survey()
    };
    let with = make(&spec, DlConvention::Observed);
    let without = make(
        &MockSpec {
            outlier_fraction: 0.0,
            ..spec.clone()
        },
        DlConvention::Observed,
    );
    assert_eq!(bits(&with.true_v_pec), bits(&without.true_v_pec));
    let k = with.true_outlier.iter().filter(|x| **x).count() as f64;
    let sd = (5000.0f64 * 0.05 * 0.95).sqrt();
    assert!((k - 250.0).abs() < 4.0 * sd, "{k}");
    for i in 0..with.len() {
        let d = with.mu[i] - without.mu[i];
        if with.true_outlier[i] {
            assert!((2.5..=4.0).contains(&d.abs()), "{d}");
        } else {
            assert_eq!(d, 0.0);
        }
    }
}

/// (2) With every error zero, the estimator inverts the forward model exactly: from
/// (z_helio, z_cmb boosted from it, μ) it recovers the true velocity, in each convention.
/// Expectation: the forward model and the estimator use the same composition law, Doppler
/// formula, boost and D_L convention, so only rounding separates them.
#[test]
fn noiseless_mock_recovers_true_velocities() {
    let c = cosmology();
    let boost = cmb();
    let rotations = SkyRotations::default();
    let mut spec = noiseless(300);
    spec.sigma_v = 300.0;
    for convention in CONVENTIONS {
        let cat = generate(&spec, &c, &boost, convention).unwrap();
        let opts = EstimatorOptions {
            convention,
            sigma_star_km_s: 0.0,
            boost: Default::default(),
        };
        for i in 0..cat.len() {
            // Position as a user would have it: from the catalogue's RA/Dec.
            let icrs = Direction::<Icrs>::from_lon_lat_deg(cat.ra[i], cat.dec[i]).unwrap();
            let n = rotations.icrs_to_galactic.apply(&icrs);
            let z_helio = Redshift::<Heliocentric>::new(cat.z_helio[i]).unwrap();
            let z_cmb = boost.from_heliocentric(z_helio, &n);
            assert!((z_cmb.value() - cat.true_z_cmb[i]).abs() < 1e-13);
            let obs = Observation {
                z_helio,
                z_cmb,
                z_err: cat.z_err[i],
                distance: Distance {
                    kind: DistanceKind::Mu,
                    value: cat.mu[i],
                    error: cat.mu_err[i],
                },
            };
            let pv = peculiar_velocity(&c, &obs, &opts).unwrap();
            assert!(
                (pv.v_pec - cat.true_v_pec[i]).abs() < 1e-6,
                "{convention:?} object {i}: {} vs {}",
                pv.v_pec,
                cat.true_v_pec[i]
            );
            assert!((pv.z_cos - cat.true_z_cos[i]).abs() < 1e-12);
        }
    }
}

/// (3) Zone of avoidance and sky/radial uniformity.
#[test]
fn zone_of_avoidance_and_volume_uniformity() {
    let c = cosmology();
    let zone = 15.0_f64;
    let spec = MockSpec {
        n: 6000,
        zone_of_avoidance_deg: Some(zone),
        ..noiseless(0)
    };
    let cat = make(&spec, DlConvention::Observed);
    let rotations = SkyRotations::default();
    let n = cat.len();
    let sin_zone = zone.to_radians().sin();
    let mut north = 0;
    let mut low_half = 0;
    for i in 0..n {
        // b recomputed from the reported RA/Dec, so this also checks the rotation.
        let icrs = Direction::<Icrs>::from_lon_lat_deg(cat.ra[i], cat.dec[i]).unwrap();
        let (_, b) = rotations.icrs_to_galactic.apply(&icrs).lon_lat_deg();
        assert!(b.abs() >= zone - 1e-9, "object {i} at b = {b}");
        let (_, b_direct) = Direction::<Galactic>::from_cartesian(
            cat.n_galactic[i][0],
            cat.n_galactic[i][1],
            cat.n_galactic[i][2],
        )
        .unwrap()
        .lon_lat_deg();
        assert!((b - b_direct).abs() < 1e-9);
        north += usize::from(b > 0.0);
        // Uniform solid angle outside the zone: |sin b| uniform on [sin b_ZoA, 1]
        // (dΩ = d(sin b) dl), so half lie below its midpoint.
        low_half += usize::from(b.to_radians().sin().abs() < 0.5 * (1.0 + sin_zone));
    }
    for (what, count) in [("north", north), ("low |sin b|", low_half)] {
        let f = count as f64 / n as f64;
        assert!(
            (f - 0.5).abs() < 3.0 * binomial_sigma(0.5, n),
            "{what}: fraction {f}"
        );
    }

    // Radial: uniform in volume, volume element r² dr, so D³ is uniform between D_min³ and
    // D_max³. Half the objects lie below the midpoint of the D³ range, and the fraction
    // below the midpoint of the D range is (D_mid³ − D_min³)/(D_max³ − D_min³).
    let d_min = c.comoving_distance(spec.z_min).unwrap();
    let d_max = c.comoving_distance(spec.z_max).unwrap();
    let mid_cube = 0.5 * (d_min.powi(3) + d_max.powi(3));
    let d_mid = 0.5 * (d_min + d_max);
    let p_mid = (d_mid.powi(3) - d_min.powi(3)) / (d_max.powi(3) - d_min.powi(3));
    let mut below_cube = 0;
    let mut below_mid = 0;
    for i in 0..n {
        let d = c.comoving_distance(cat.true_z_cos[i]).unwrap();
        assert!((d - cat.true_d_c[i]).abs() < 1e-7 * d);
        assert!(d >= d_min * (1.0 - 1e-12) && d <= d_max * (1.0 + 1e-12));
        below_cube += usize::from(d.powi(3) < mid_cube);
        below_mid += usize::from(d < d_mid);
    }
    let f_cube = below_cube as f64 / n as f64;
    assert!(
        (f_cube - 0.5).abs() < 3.0 * binomial_sigma(0.5, n),
        "{f_cube}"
    );
    let f_mid = below_mid as f64 / n as f64;
    assert!(
        (f_mid - p_mid).abs() < 3.0 * binomial_sigma(p_mid, n),
        "{f_mid} vs {p_mid}"
    );
}

/// (4) Least squares of v = B·r̂ on the true velocities recovers the bulk flow. Expected
/// scatter: the least-squares covariance σ_v² (Σ r̂ r̂ᵀ)⁻¹, which for the full sky is
/// ≈ σ_v² · 3/N per component (⟨r̂_k²⟩ = 1/3).
#[test]
fn bulk_flow_recovered_from_true_velocities() {
    let spec = MockSpec {
        n: 4000,
        sigma_v: 250.0,
        ..noiseless(0)
    };
    let cat = make(&spec, DlConvention::Observed);
    let mut ata = Matrix3::<f64>::zeros();
    let mut atv = Vector3::<f64>::zeros();
    for (r, v) in cat.n_galactic.iter().zip(&cat.true_v_pec) {
        let r = Vector3::new(r[0], r[1], r[2]);
        ata += r * r.transpose();
        atv += r * *v;
    }
    let inv = ata.try_inverse().unwrap();
    let b = inv * atv;
    let n = cat.len() as f64;
    for k in 0..3 {
        let sigma = spec.sigma_v * inv[(k, k)].sqrt();
        // The exact covariance is close to the isotropic σ_v sqrt(3/N).
        let isotropic = spec.sigma_v * (3.0 / n).sqrt();
        assert!(
            (sigma / isotropic - 1.0).abs() < 0.1,
            "{sigma} vs {isotropic}"
        );
        assert!(
            (b[k] - spec.bulk_flow[k]).abs() < 4.0 * sigma,
            "component {k}: {} vs {} (σ = {sigma})",
            b[k],
            spec.bulk_flow[k]
        );
    }

    // Without scatter the fit is exact.
    let exact = make(&noiseless(200), DlConvention::Observed);
    for (r, v) in exact.n_galactic.iter().zip(&exact.true_v_pec) {
        let model: f64 = (0..3).map(|k| r[k] * noiseless(0).bulk_flow[k]).sum();
        assert!((v - model).abs() < 1e-9);
    }
}

/// (5) The population mix follows the normalised fractions within 4σ (binomial variance).
#[test]
fn population_fractions() {
    let mut spec = noiseless(8000);
    spec.populations = ["x", "y", "z"]
        .iter()
        .zip([6.0, 3.0, 1.0]) // unnormalised on purpose
        .map(|(name, fraction)| Population {
            name: (*name).into(),
            fraction,
            distance_error: DistanceError::Magnitudes(0.1),
        })
        .collect();
    let cat = make(&spec, DlConvention::Observed);
    for (p, expected) in spec.populations.iter().zip(spec.normalised_fractions()) {
        let count = cat.population.iter().filter(|s| **s == p.name).count();
        let f = count as f64 / cat.len() as f64;
        assert!(
            (f - expected).abs() < 4.0 * binomial_sigma(expected, cat.len()),
            "{}: {f} vs {expected}",
            p.name
        );
    }
}

/// (6) μ − μ_true has the stated scatter per population: σ_μ = 0.15 mag for Magnitudes,
/// (5/ln 10)·0.20 for Fractional (log-normal distance). The sample standard deviation of
/// N Gaussian draws has relative error ≈ 1/sqrt(2N) (≈ 0.8 % here), so 3 % is generous; the
/// mean has error σ/sqrt(N). The redshift error has the stated σ too.
#[test]
fn distance_modulus_scatter_per_population() {
    let spec = MockSpec {
        n: 20_000,
        seed: 99,
        outlier_fraction: 0.0,
        ..MockSpec::demo_survey()
    };
    let cat = make(&spec, DlConvention::Observed);
    let stats = |d: &[f64]| {
        let n = d.len() as f64;
        let mean = d.iter().sum::<f64>() / n;
        let var = d.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
        (mean, var.sqrt())
    };
    for p in &spec.populations {
        let expected = match p.distance_error {
            DistanceError::Fractional(f) => 5.0 / std::f64::consts::LN_10 * f,
            DistanceError::Magnitudes(m) => m,
        };
        let resid: Vec<f64> = (0..cat.len())
            .filter(|&i| cat.population[i] == p.name)
            .map(|i| {
                assert_eq!(cat.mu_err[i], expected);
                cat.mu[i] - cat.true_mu[i]
            })
            .collect();
        let (mean, sd) = stats(&resid);
        assert!(
            (sd / expected - 1.0).abs() < 0.03,
            "{}: {sd} vs {expected}",
            p.name
        );
        assert!(
            mean.abs() < 4.0 * expected / (resid.len() as f64).sqrt(),
            "{}: mean {mean}",
            p.name
        );
    }
    let dz: Vec<f64> = (0..cat.len())
        .map(|i| cat.z_helio[i] - cat.true_z_helio[i])
        .collect();
    let (_, sd) = stats(&dz);
    assert!((sd / spec.z_err - 1.0).abs() < 0.03, "{sd}");
    assert!(cat.z_err.iter().all(|&e| e == spec.z_err));
}

/// Each D_L convention is the stated function of the true redshifts.
#[test]
fn conventions_follow_their_definitions() {
    let c = cosmology();
    let spec = noiseless(100);
    for convention in CONVENTIONS {
        let cat = make(&spec, convention);
        for i in 0..cat.len() {
            let d_m = c.transverse_comoving_distance(cat.true_z_cos[i]).unwrap();
            let (zh, zc, zcos) = (
                1.0 + cat.true_z_helio[i],
                1.0 + cat.true_z_cmb[i],
                1.0 + cat.true_z_cos[i],
            );
            let d_l = match convention {
                DlConvention::Observed => zh * d_m,
                DlConvention::Cosmological => zcos * d_m,
                DlConvention::Full => zh * zc * d_m / zcos,
            };
            let mu = 5.0 * (d_l * 1e6 / 10.0).log10();
            assert!((mu - cat.true_mu[i]).abs() < 1e-9, "{convention:?}");
        }
    }
}

/// Bad specs are refused with a message naming the field.
#[test]
fn invalid_specs_are_rejected() {
    let good = MockSpec::demo_survey();
    let cases: Vec<(&str, MockSpec)> = vec![
        (
            "n",
            MockSpec {
                n: 0,
                ..good.clone()
            },
        ),
        (
            "z_min",
            MockSpec {
                z_min: 0.0,
                ..good.clone()
            },
        ),
        (
            "z_max",
            MockSpec {
                z_max: 0.002,
                ..good.clone()
            },
        ),
        (
            "sigma_v",
            MockSpec {
                sigma_v: -1.0,
                ..good.clone()
            },
        ),
        (
            "z_err",
            MockSpec {
                z_err: f64::NAN,
                ..good.clone()
            },
        ),
        (
            "zone_of_avoidance_deg",
            MockSpec {
                zone_of_avoidance_deg: Some(90.0),
                ..good.clone()
            },
        ),
        (
            "bulk_flow",
            MockSpec {
                bulk_flow: [f64::INFINITY, 0.0, 0.0],
                ..good.clone()
            },
        ),
        (
            "populations",
            MockSpec {
                populations: vec![],
                outlier_fraction: 0.0,
                outlier_offset_mag: [2.5, 4.0],
                ..good.clone()
            },
        ),
        ("populations[1].fraction", {
            let mut s = good.clone();
            s.populations[1].fraction = 0.0;
            s
        }),
        ("populations[0].distance_error", {
            let mut s = good.clone();
            s.populations[0].distance_error = DistanceError::Fractional(-0.1);
            s
        }),
        ("populations[1].name", {
            let mut s = good.clone();
            s.populations[1].name = s.populations[0].name.clone();
            s
        }),
    ];
    for (field, spec) in cases {
        match generate(&spec, &cosmology(), &cmb(), DlConvention::Observed) {
            Err(MockError::InvalidSpec { field: f, reason }) => {
                assert_eq!(f, field, "{reason}");
            }
            other => panic!("{field}: expected InvalidSpec, got {other:?}"),
        }
    }
    // Beyond what the cosmology table covers.
    let far = MockSpec {
        z_max: 50.0,
        ..good.clone()
    };
    assert!(matches!(
        generate(&far, &cosmology(), &cmb(), DlConvention::Observed),
        Err(MockError::OutOfCosmology { .. })
    ));
}

/// The spec round-trips through JSON and has a schema.
#[test]
fn spec_serialises() {
    let spec = MockSpec::demo_survey();
    let json = serde_json::to_string_pretty(&spec).unwrap();
    let back: MockSpec = serde_json::from_str(&json).unwrap();
    assert_eq!(back, spec);
    assert!(json.contains("\"fractional\": 0.2"), "{json}");
    let schema = serde_json::to_string(&schemars::schema_for!(MockSpec)).unwrap();
    assert!(schema.contains("zone_of_avoidance_deg"));
}
