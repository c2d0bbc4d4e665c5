//! Velocity fields (`flowsift::physics::field`, `flowsift::catalogue::field_io`).
//!
//! External references, named beside each check:
//! * trilinear interpolation: exact for fields linear in each coordinate (Press et al. 2007,
//!   Numerical Recipes 3rd ed., §3.6), and second-order accurate for smooth fields;
//! * linear theory: the analytic velocity of a plane-wave density mode, derived from
//!   ∇·v = −H0 f δ with v irrotational (Peebles 1980, LSS §14);
//! * divergence by the fourth-order central difference with weights (1, −8, 0, 8, −1)/12h
//!   (Fornberg 1988, Math. Comp. 51, 699, Table 1);
//! * FITS files read back with the `fitsio` crate, independently of flowsift's reader.

use std::f64::consts::PI;
use std::path::Path;

use fitsio::hdu::HduInfo;
use fitsio::images::{ImageDescription, ImageType};
use fitsio::FitsFile;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use flowsift::catalogue::field_io::{
    read_density, read_field, write_field_fits, write_field_table,
};
use flowsift::catalogue::{CatalogueError, WriteOptions};
use flowsift::physics::cosmology::LengthUnit;
use flowsift::physics::field::{
    velocity_from_density, velocity_from_density_isolated, AnalyticField, FieldAxes, FlowModel,
    InfallCentre, VelocityGrid,
};

fn tmp() -> tempfile::TempDir {
    tempfile::Builder::new()
        .prefix("flowsift-field-")
        .tempdir()
        .unwrap()
}

fn norm(v: [f64; 3]) -> f64 {
    (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt()
}

fn sub(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}

fn message(e: CatalogueError) -> String {
    e.to_string()
}

/// One infall centre, no bulk: H0 = 70 km/s/Mpc, f = 0.5.
fn infall_model() -> AnalyticField {
    AnalyticField {
        bulk: [0.0; 3],
        centres: vec![InfallCentre {
            name: "test centre".into(),
            position: [20.0, -10.0, 6.0],
            delta0: 1.5,
            r_scale: 30.0,
        }],
        growth_rate: 0.5,
        h0_km_s_per_length: 70.0,
        axes: FieldAxes::Supergalactic,
        length_unit: LengthUnit::Mpc,
    }
}

// ---------------------------------------------------------------------------------------------
// (a) Interpolation
// ---------------------------------------------------------------------------------------------

#[test]
fn infall_formula_matches_linear_theory_by_hand() {
    // Peebles (1976, 1980 §14): v = −(1/3) H0 f Δ(<r) r r̂. At r = r_s, Δ = δ0/2.
    let model = infall_model();
    let c = &model.centres[0];
    let p = [c.position[0] + c.r_scale, c.position[1], c.position[2]];
    let v = model.velocity_at(p);
    let expected = -(1.0 / 3.0) * 70.0 * 0.5 * (1.5 / 2.0) * c.r_scale;
    assert!((v[0] - expected).abs() < 1e-12 * expected.abs(), "{v:?}");
    assert_eq!(v[1], 0.0);
    assert_eq!(v[2], 0.0);
    // Towards the centre, zero at the centre.
    assert!(v[0] < 0.0);
    assert_eq!(model.velocity_at(c.position), [0.0; 3]);
    // Mean and local overdensity are consistent: r³Δ(<r) = 3 ∫₀ʳ δ(s) s² ds (Simpson, 2000
    // panels).
    let r = 37.0;
    let panels = 2000;
    let hstep = r / panels as f64;
    let mut integral = 0.0;
    for i in 0..=panels {
        let s = i as f64 * hstep;
        let w = if i == 0 || i == panels {
            1.0
        } else if i % 2 == 1 {
            4.0
        } else {
            2.0
        };
        integral += w * c.local_overdensity(s) * s * s;
    }
    integral *= hstep / 3.0;
    let lhs = r.powi(3) * c.mean_overdensity(r);
    assert!((3.0 * integral - lhs).abs() < 1e-9 * lhs);
}

#[test]
fn trilinear_interpolation_of_sampled_infall_is_within_one_percent() {
    // 64³ cells of 4 Mpc centred on the observer; the centre's core (r < r_s = 30 Mpc) is
    // avoided. Trilinear error ≈ (h²/8)|∂²v| (Numerical Recipes §3.6), here below 0.5%.
    let model = infall_model();
    let origin = [-126.0; 3];
    let grid = model.sample(origin, 4.0, [64, 64, 64]).unwrap();
    let (lo, hi) = grid.bounds();
    assert_eq!(lo, origin);
    assert_eq!(hi, [126.0; 3]);
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let centre = model.centres[0].position;
    let mut checked = 0;
    let mut worst: f64 = 0.0;
    while checked < 2000 {
        let p = [
            rng.random_range(-126.0..126.0),
            rng.random_range(-126.0..126.0),
            rng.random_range(-126.0..126.0),
        ];
        if norm(sub(p, centre)) < model.centres[0].r_scale {
            continue;
        }
        let exact = model.velocity_at(p);
        let interp = grid.velocity_at(p).expect("inside");
        let rel = norm(sub(interp, exact)) / norm(exact);
        worst = worst.max(rel);
        checked += 1;
    }
    assert!(worst < 0.01, "worst relative error {worst}");
}

#[test]
fn trilinear_interpolation_is_exact_for_trilinear_fields() {
    // Numerical Recipes §3.6: the interpolant reproduces 1, x, y, z, xy, yz, zx, xyz.
    let f = |p: [f64; 3]| {
        [
            3.0 + 2.0 * p[0] - p[1] + 0.5 * p[2] + 0.01 * p[0] * p[1] * p[2],
            -1.0 + 0.3 * p[0] * p[1] - 0.2 * p[2],
            0.7 * p[1] * p[2] + 0.1 * p[0] * p[2] - 5.0,
        ]
    };
    let shape = [7, 5, 6];
    let (origin, h) = ([-10.0, 3.0, 0.5], 2.5);
    let n = shape[0] * shape[1] * shape[2];
    let mut v = [vec![0.0; n], vec![0.0; n], vec![0.0; n]];
    for k in 0..shape[2] {
        for j in 0..shape[1] {
            for i in 0..shape[0] {
                let p = [
                    origin[0] + h * i as f64,
                    origin[1] + h * j as f64,
                    origin[2] + h * k as f64,
                ];
                let idx = i + shape[0] * (j + shape[1] * k);
                let fv = f(p);
                for c in 0..3 {
                    v[c][idx] = fv[c];
                }
            }
        }
    }
    let grid = VelocityGrid::new(
        origin,
        h,
        shape,
        FieldAxes::Galactic,
        LengthUnit::MpcOverH,
        v,
    )
    .unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let (lo, hi) = grid.bounds();
    for _ in 0..500 {
        let p = [
            rng.random_range(lo[0]..=hi[0]),
            rng.random_range(lo[1]..=hi[1]),
            rng.random_range(lo[2]..=hi[2]),
        ];
        let got = grid.velocity_at(p).unwrap();
        let want = f(p);
        for c in 0..3 {
            assert!(
                (got[c] - want[c]).abs() < 1e-11 * (1.0 + want[c].abs()),
                "{p:?} {c}: {} vs {}",
                got[c],
                want[c]
            );
        }
    }
    // Corners and cell centres are inside and exact.
    for p in [lo, hi, grid.cell_centre(3, 2, 4)] {
        assert!(grid.contains(p));
        let got = grid.velocity_at(p).unwrap();
        let want = f(p);
        for c in 0..3 {
            assert!((got[c] - want[c]).abs() < 1e-11 * (1.0 + want[c].abs()));
        }
    }
    // Outside the cell-centre lattice: None, and contains() agrees.
    let outside = [
        [lo[0] - 1e-6, lo[1] + 1.0, lo[2] + 1.0],
        [hi[0] + 1e-6, lo[1] + 1.0, lo[2] + 1.0],
        [lo[0] + 1.0, hi[1] + 0.5 * h, lo[2] + 1.0],
        [lo[0] + 1.0, lo[1] + 1.0, lo[2] - 100.0],
        [f64::NAN, lo[1], lo[2]],
        [f64::INFINITY, lo[1], lo[2]],
    ];
    for p in outside {
        assert!(!grid.contains(p), "{p:?}");
        assert_eq!(grid.velocity_at(p), None, "{p:?}");
    }
}

#[test]
fn grid_construction_is_checked() {
    let ok = || [vec![0.0; 8], vec![0.0; 8], vec![0.0; 8]];
    let axes = FieldAxes::Supergalactic;
    let unit = LengthUnit::Mpc;
    assert!(VelocityGrid::new([0.0; 3], 1.0, [2, 2, 2], axes, unit, ok()).is_ok());
    assert!(VelocityGrid::new([0.0; 3], 0.0, [2, 2, 2], axes, unit, ok()).is_err());
    assert!(VelocityGrid::new([0.0; 3], 1.0, [2, 2, 3], axes, unit, ok()).is_err());
    assert!(VelocityGrid::new([f64::NAN, 0.0, 0.0], 1.0, [2, 2, 2], axes, unit, ok()).is_err());
    assert!(VelocityGrid::new([0.0; 3], 1.0, [0, 2, 2], axes, unit, ok()).is_err());
}

// ---------------------------------------------------------------------------------------------
// (b) Linear theory by FFT
// ---------------------------------------------------------------------------------------------

/// A density mode δ = A cos(k·x + φ) on cell centres x = h·j.
struct Mode {
    m: [i64; 3],
    amplitude: f64,
    phase: f64,
}

fn wavevector(mode: &Mode, shape: [usize; 3], h: f64) -> [f64; 3] {
    let mut k = [0.0; 3];
    for a in 0..3 {
        k[a] = 2.0 * PI * mode.m[a] as f64 / (shape[a] as f64 * h);
    }
    k
}

fn density(modes: &[Mode], shape: [usize; 3], h: f64) -> Vec<f64> {
    let n = shape[0] * shape[1] * shape[2];
    let mut delta = vec![0.0; n];
    for (idx, d) in delta.iter_mut().enumerate() {
        let x = position(idx, shape, h);
        for mode in modes {
            let k = wavevector(mode, shape, h);
            *d += mode.amplitude * (k[0] * x[0] + k[1] * x[1] + k[2] * x[2] + mode.phase).cos();
        }
    }
    delta
}

fn position(idx: usize, shape: [usize; 3], h: f64) -> [f64; 3] {
    let i = idx % shape[0];
    let j = (idx / shape[0]) % shape[1];
    let k = idx / (shape[0] * shape[1]);
    [h * i as f64, h * j as f64, h * k as f64]
}

/// Analytic linear-theory velocity of the modes: for δ = A cos(k·x + φ), the irrotational v
/// with ∇·v = −H f δ is v = −(H f A / k²) k sin(k·x + φ) (Peebles 1980, §14).
fn analytic_velocity(modes: &[Mode], shape: [usize; 3], h: f64, hf: f64) -> [Vec<f64>; 3] {
    let n = shape[0] * shape[1] * shape[2];
    let mut v = [vec![0.0; n], vec![0.0; n], vec![0.0; n]];
    for idx in 0..n {
        let x = position(idx, shape, h);
        for mode in modes {
            let k = wavevector(mode, shape, h);
            let k2 = k[0] * k[0] + k[1] * k[1] + k[2] * k[2];
            let s = (k[0] * x[0] + k[1] * x[1] + k[2] * x[2] + mode.phase).sin();
            for (vc, kc) in v.iter_mut().zip(k) {
                vc[idx] -= hf * mode.amplitude / k2 * kc * s;
            }
        }
    }
    v
}

fn assert_fields_close(got: &[Vec<f64>; 3], want: &[Vec<f64>; 3], rel: f64) {
    let scale = want
        .iter()
        .flat_map(|c| c.iter())
        .fold(0.0f64, |m, x| m.max(x.abs()));
    assert!(scale > 0.0);
    for c in 0..3 {
        for (idx, (g, w)) in got[c].iter().zip(&want[c]).enumerate() {
            assert!(
                (g - w).abs() <= rel * scale,
                "component {c}, cell {idx}: {g} vs {w} (scale {scale})"
            );
        }
    }
}

#[test]
fn fft_velocity_of_one_mode_matches_the_analytic_solution() {
    // Non-cubic box with odd and even sides; h⁻¹ Mpc units with H0 = 100.
    let shape = [16, 12, 9];
    let h = 5.0;
    let (f, h0) = (0.52, 100.0);
    let modes = [Mode {
        m: [1, 2, -3],
        amplitude: 0.3,
        phase: 0.0,
    }];
    let delta = density(&modes, shape, h);
    let v = velocity_from_density(&delta, shape, h, f, h0);
    assert_fields_close(&v, &analytic_velocity(&modes, shape, h, h0 * f), 1e-10);
}

#[test]
fn fft_velocity_of_two_modes_matches_the_analytic_solution() {
    let shape = [12, 10, 14];
    let h = 3.0;
    let (f, h0) = (0.8, 67.4);
    let modes = [
        Mode {
            m: [1, -2, 3],
            amplitude: 0.2,
            phase: 0.4,
        },
        Mode {
            m: [3, 0, 1],
            amplitude: -0.05,
            phase: -1.1,
        },
    ];
    let delta = density(&modes, shape, h);
    let v = velocity_from_density(&delta, shape, h, f, h0);
    assert_fields_close(&v, &analytic_velocity(&modes, shape, h, h0 * f), 1e-10);
}

#[test]
fn fft_velocity_has_the_continuity_divergence_by_finite_differences() {
    // ∇·v = −H0 f δ (Peebles 1980 §14), checked with the fourth-order central difference
    // (Fornberg 1988, Table 1) on well-resolved modes: truncation ≈ (k h)⁴/30 < 1e-3.
    let shape = [32, 32, 32];
    let h = 2.0;
    let (f, h0) = (0.5, 70.0);
    let modes = [
        Mode {
            m: [1, 1, -1],
            amplitude: 0.4,
            phase: 0.3,
        },
        Mode {
            m: [0, 2, 1],
            amplitude: 0.25,
            phase: -0.8,
        },
    ];
    let delta = density(&modes, shape, h);
    let v = velocity_from_density(&delta, shape, h, f, h0);
    let at = |c: usize, i: i64, j: i64, k: i64| {
        let w = |x: i64, m: usize| x.rem_euclid(m as i64) as usize;
        v[c][w(i, shape[0]) + shape[0] * (w(j, shape[1]) + shape[1] * w(k, shape[2]))]
    };
    let d4 = |c: usize, i: i64, j: i64, k: i64| {
        let step = |s: i64| match c {
            0 => at(0, i + s, j, k),
            1 => at(1, i, j + s, k),
            _ => at(2, i, j, k + s),
        };
        (step(-2) - 8.0 * step(-1) + 8.0 * step(1) - step(2)) / (12.0 * h)
    };
    let scale = h0 * f * delta.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    for (idx, &d) in delta.iter().enumerate() {
        let i = (idx % shape[0]) as i64;
        let j = ((idx / shape[0]) % shape[1]) as i64;
        let k = (idx / (shape[0] * shape[1])) as i64;
        let div = d4(0, i, j, k) + d4(1, i, j, k) + d4(2, i, j, k);
        let want = -h0 * f * d;
        assert!(
            (div - want).abs() < 1e-3 * scale,
            "cell {idx}: ∇·v = {div}, −H f δ = {want}"
        );
    }
}

#[test]
fn fft_velocity_drops_the_mean_and_the_nyquist_planes() {
    let shape = [8, 6, 5];
    let n = shape[0] * shape[1] * shape[2];
    // A uniform δ drives no flow.
    let v = velocity_from_density(&vec![0.7; n], shape, 1.0, 1.0, 100.0);
    assert!(v.iter().flatten().all(|x| x.abs() < 1e-12));
    // δ = cos(π j_x) lives on the x Nyquist plane: no velocity.
    let delta: Vec<f64> = (0..n)
        .map(|idx| if (idx % shape[0]) % 2 == 0 { 1.0 } else { -1.0 })
        .collect();
    let v = velocity_from_density(&delta, shape, 1.0, 1.0, 100.0);
    assert!(v.iter().flatten().all(|x| x.abs() < 1e-12));
    // A resolved mode on top of both passes through unchanged.
    let modes = [Mode {
        m: [1, 1, 2],
        amplitude: 0.1,
        phase: 0.2,
    }];
    let mut delta2 = density(&modes, shape, 1.0);
    for (d, extra) in delta2.iter_mut().zip(&delta) {
        *d += 0.7 + 0.3 * extra;
    }
    let v = velocity_from_density(&delta2, shape, 1.0, 1.0, 100.0);
    assert_fields_close(&v, &analytic_velocity(&modes, shape, 1.0, 100.0), 1e-10);
}

/// Isolated boundary: the FFT result equals the direct sum over cells
/// v_i = (H0 f h³/4π) Σ_{j≠i} δ_j (x_j − x_i)/|x_j − x_i|³ (the discretised linear-theory
/// integral, Peebles 1980 §14), evaluated here cell by cell, on a small non-cubic grid with
/// one single-cell axis.
#[test]
fn isolated_fft_equals_the_direct_sum() {
    for shape in [[5usize, 4, 3], [6, 1, 4]] {
        let n = shape[0] * shape[1] * shape[2];
        let (h, f, h0) = (2.5, 0.55, 70.0);
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let delta: Vec<f64> = (0..n).map(|_| rng.random_range(-0.8..1.5)).collect();
        let v = velocity_from_density_isolated(&delta, shape, h, f, h0);
        let pos = |idx: usize| {
            [
                (idx % shape[0]) as f64 * h,
                ((idx / shape[0]) % shape[1]) as f64 * h,
                (idx / (shape[0] * shape[1])) as f64 * h,
            ]
        };
        let a = h0 * f * h.powi(3) / (4.0 * std::f64::consts::PI);
        let mut scale = 0.0f64;
        let mut direct = vec![[0.0; 3]; n];
        for (i, d) in direct.iter_mut().enumerate() {
            for (j, &dj) in delta.iter().enumerate() {
                if i == j {
                    continue;
                }
                let r = sub(pos(j), pos(i));
                let r3 = norm(r).powi(3);
                for c in 0..3 {
                    d[c] += a * dj * r[c] / r3;
                }
            }
            scale = scale.max(norm(*d));
        }
        for (i, d) in direct.iter().enumerate() {
            for c in 0..3 {
                assert!(
                    (v[c][i] - d[c]).abs() < 1e-10 * scale,
                    "{shape:?} cell {i} component {c}: FFT {} vs direct {}",
                    v[c][i],
                    d[c]
                );
            }
        }
    }
}

/// A uniform sphere of overdensity δ0 and radius R: linear theory gives
/// v = −(H0 f/3) δ̄(<r) r, i.e. −(H0 f/3) δ0 r inside and −(H0 f/3) δ0 R³/r² outside,
/// pointing to the centre (Peebles 1980 §14; Gauss's theorem for ∇·v = −H0 f δ). The
/// sphere is a set of whole cells, so its mass (Σ δ h³) is taken from the cells and the
/// outside check is to 0.1 % (measured: 10⁻⁴); inside, the lumpiness of a 6-cell radius
/// allows 3 % (measured: 1.2 %). The
/// periodic solver, which removes the box's mean δ and adds images, misses the outside
/// value near the box edge by far more.
#[test]
fn isolated_velocity_of_a_uniform_sphere() {
    let m = 40usize;
    let shape = [m, m, m];
    let (h, f, h0, delta0, radius) = (2.0, 0.5, 70.0, 0.6, 12.0);
    let centre = [19.5 * h, 19.5 * h, 19.5 * h];
    let pos = |i: usize, j: usize, k: usize| [i as f64 * h, j as f64 * h, k as f64 * h];
    let mut delta = vec![0.0; m * m * m];
    let mut cells = 0usize;
    for k in 0..m {
        for j in 0..m {
            for i in 0..m {
                if norm(sub(pos(i, j, k), centre)) < radius {
                    delta[i + m * (j + m * k)] = delta0;
                    cells += 1;
                }
            }
        }
    }
    let mass = delta0 * cells as f64 * h.powi(3);
    let v = velocity_from_density_isolated(&delta, shape, h, f, h0);
    let periodic = velocity_from_density(&delta, shape, h, f, h0);
    let radial = |field: &[Vec<f64>; 3], i: usize, j: usize, k: usize| {
        let r = sub(pos(i, j, k), centre);
        let idx = i + m * (j + m * k);
        (r[0] * field[0][idx] + r[1] * field[1][idx] + r[2] * field[2][idx]) / norm(r)
    };
    let mut worst_periodic = 0.0f64;
    for (i, j, k) in [(38, 19, 19), (30, 30, 24), (2, 19, 36), (34, 5, 19)] {
        let r = norm(sub(pos(i, j, k), centre));
        assert!(r > radius + 2.0 * h);
        let want = -h0 * f * mass / (4.0 * std::f64::consts::PI * r * r);
        let got = radial(&v, i, j, k);
        assert!(
            (got / want - 1.0).abs() < 1e-3,
            "outside at r = {r}: {got} vs {want}"
        );
        worst_periodic = worst_periodic.max((radial(&periodic, i, j, k) / want - 1.0).abs());
    }
    assert!(worst_periodic > 0.2, "periodic error only {worst_periodic}");
    for (i, j, k) in [(23, 19, 19), (17, 22, 19), (19, 19, 15)] {
        let r = norm(sub(pos(i, j, k), centre));
        let want = -h0 * f * delta0 * r / 3.0;
        let got = radial(&v, i, j, k);
        assert!(
            (got / want - 1.0).abs() < 0.03,
            "inside at r = {r}: {got} vs {want}"
        );
    }
}

// ---------------------------------------------------------------------------------------------
// (c) Files
// ---------------------------------------------------------------------------------------------

fn small_grid(axes: FieldAxes, unit: LengthUnit) -> VelocityGrid {
    let shape = [4, 3, 2];
    let n = 24;
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let mut comp = || {
        (0..n)
            .map(|_| rng.random_range(-900.0..900.0))
            .collect::<Vec<f64>>()
    };
    let v = [comp(), comp(), comp()];
    VelocityGrid::new(
        [-12.345678901234567, 0.1, 1.0e-3],
        2.5,
        shape,
        axes,
        unit,
        v,
    )
    .unwrap()
}

#[test]
fn fits_round_trip_is_exact_and_readable_by_fitsio() {
    let dir = tmp();
    for (name, axes, unit) in [
        ("field.fits", FieldAxes::Supergalactic, LengthUnit::Mpc),
        ("field.fits.gz", FieldAxes::Galactic, LengthUnit::MpcOverH),
    ] {
        let path = dir.path().join(name);
        let grid = small_grid(axes, unit);
        write_field_fits(&path, &grid).unwrap();
        let back = read_field(&path, None, None).unwrap();
        assert_eq!(back, grid, "{name}");
        // Hints that agree are fine; contradicting ones are errors naming the card.
        assert_eq!(read_field(&path, Some(axes), Some(unit)).unwrap(), grid);
        let other = match axes {
            FieldAxes::Supergalactic => FieldAxes::Galactic,
            FieldAxes::Galactic => FieldAxes::Supergalactic,
        };
        let e = message(read_field(&path, Some(other), None).unwrap_err());
        assert!(e.contains("FS_AXES") && e.contains(name), "{e}");
    }

    // The layout, read with the independent fitsio crate.
    let path = dir.path().join("field.fits");
    let grid = small_grid(FieldAxes::Supergalactic, LengthUnit::Mpc);
    let mut f = FitsFile::open(&path).unwrap();
    let primary = f.primary_hdu().unwrap();
    let form: String = primary.read_key(&mut f, "FS_FORM").unwrap();
    assert_eq!(form, "FLOWSIFT VELOCITY GRID");
    for (c, name) in ["VX", "VY", "VZ"].iter().enumerate() {
        let hdu = f.hdu(*name).unwrap();
        match &hdu.info {
            HduInfo::ImageInfo { shape, image_type } => {
                // fitsio lists axes slowest first: [NAXIS3, NAXIS2, NAXIS1].
                assert_eq!(shape, &vec![2, 3, 4]);
                assert_eq!(*image_type, ImageType::Double);
            }
            other => panic!("{name}: {other:?}"),
        }
        let data: Vec<f64> = hdu.read_image(&mut f).unwrap();
        assert_eq!(data, grid.v[c]);
        let bunit: String = hdu.read_key(&mut f, "BUNIT").unwrap();
        assert_eq!(bunit, "km/s");
        let space: f64 = hdu.read_key(&mut f, "FS_CELL").unwrap();
        assert_eq!(space, 2.5);
        let o1: f64 = hdu.read_key(&mut f, "FS_ORIG1").unwrap();
        assert_eq!(o1, -12.345678901234567);
        let axes: String = hdu.read_key(&mut f, "FS_AXES").unwrap();
        assert_eq!(axes, "SUPERGALACTIC");
    }
    // Pixel [i+1, j+1, k+1] is cell (i, j, k): element i + 4 (j + 3 k).
    assert_eq!(grid.index(3, 1, 1), 3 + 4 * (1 + 3));

    // Writing again replaces the file atomically and leaves no temporary behind.
    let mut grid2 = grid.clone();
    grid2.v[0][0] = 1.0;
    write_field_fits(&path, &grid2).unwrap();
    assert_eq!(read_field(&path, None, None).unwrap(), grid2);
    let leftovers: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| {
            e.file_name()
                .to_string_lossy()
                .starts_with(".flowsift-partial")
        })
        .collect();
    assert!(leftovers.is_empty());
}

#[test]
fn fits_writer_refuses_non_finite_velocities() {
    let dir = tmp();
    let path = dir.path().join("bad.fits");
    let mut grid = small_grid(FieldAxes::Supergalactic, LengthUnit::Mpc);
    grid.v[1][5] = f64::NAN;
    let e = message(write_field_fits(&path, &grid).unwrap_err());
    assert!(e.contains("not finite") && e.contains("bad.fits"), "{e}");
    assert!(!path.exists());
}

/// A FITS file written directly with the fitsio crate: three images VX, VY, VZ of shape
/// [nx, ny, nz] = [3, 2, 2], cards given per HDU.
fn write_foreign_fits(
    path: &Path,
    names: &[&str],
    cards: &[(&str, &str)],
    numbers: &[(&str, f64)],
) {
    let mut f = FitsFile::create(path).open().unwrap();
    let description = ImageDescription {
        data_type: ImageType::Double,
        dimensions: &[2, 2, 3],
    };
    for name in names {
        let hdu = f.create_image(*name, &description).unwrap();
        for (k, v) in cards {
            hdu.write_key(&mut f, k, *v).unwrap();
        }
        for (k, v) in numbers {
            hdu.write_key(&mut f, k, *v).unwrap();
        }
        let data: Vec<f64> = (0..12).map(|i| i as f64).collect();
        hdu.write_image(&mut f, &data).unwrap();
    }
}

/// Density tables: read onto the grid; a δ at or below −1 (negative density) is refused
/// with the file and the grid point named.
#[test]
fn density_tables_and_bad_contrasts() {
    let dir = tmp();
    let mut csv = String::from("x,y,z,delta\n");
    for k in 0..2 {
        for j in 0..2 {
            for i in 0..3 {
                csv.push_str(&format!(
                    "{},{},{},{}\n",
                    i * 4,
                    j * 4,
                    k * 4,
                    0.1 * i as f64
                ));
            }
        }
    }
    let good = dir.path().join("delta.csv");
    std::fs::write(&good, &csv).unwrap();
    let g = read_density(&good, None, None).unwrap();
    assert_eq!(g.shape, [3, 2, 2]);
    assert_eq!(g.spacing, 4.0);
    assert!((g.v[0][2] - 0.2).abs() < 1e-15 && g.v[1].iter().all(|v| *v == 0.0));
    let bad = dir.path().join("bad.csv");
    std::fs::write(&bad, csv.replace("8,4,4,0.2", "8,4,4,-1.2")).unwrap();
    let m = message(read_density(&bad, None, None).unwrap_err());
    assert!(
        m.contains("bad.csv") && m.contains("x = 8, y = 4, z = 4") && m.contains("-1.2"),
        "{m}"
    );
}

#[test]
fn fits_files_from_elsewhere_and_bad_fits_files() {
    let dir = tmp();
    let all = ["VX", "VY", "VZ"];
    let strings = [
        ("BUNIT", "km/s"),
        ("FS_AXES", "GALACTIC"),
        ("FS_LUNIT", "Mpc/h"),
    ];
    let numbers = [
        ("FS_ORIG1", -4.0),
        ("FS_ORIG2", 0.0),
        ("FS_ORIG3", 2.0),
        ("FS_CELL", 2.0),
    ];

    // A complete file written by another program reads, with x fastest.
    let good = dir.path().join("good.fits");
    write_foreign_fits(&good, &all, &strings, &numbers);
    let grid = read_field(&good, None, None).unwrap();
    assert_eq!(grid.shape, [3, 2, 2]);
    assert_eq!(grid.axes, FieldAxes::Galactic);
    assert_eq!(grid.length_unit, LengthUnit::MpcOverH);
    assert_eq!(grid.origin, [-4.0, 0.0, 2.0]);
    // Cell (2, 1, 0) = pixel 2 + 3·1 = 5.
    let v = grid.velocity_at(grid.cell_centre(2, 1, 0)).unwrap();
    assert_eq!(v, [5.0, 5.0, 5.0]);

    // The spec allows VX as the primary array, named by HDUNAME here (the fitsio crate
    // gives its custom primary EXTNAME = '_PRIMARY').
    let path = dir.path().join("primary_vx.fits");
    {
        let description = ImageDescription {
            data_type: ImageType::Double,
            dimensions: &[2, 2, 3],
        };
        let mut f = FitsFile::create(&path)
            .with_custom_primary(&description)
            .open()
            .unwrap();
        let data: Vec<f64> = (0..12).map(|i| i as f64).collect();
        let primary = f.primary_hdu().unwrap();
        primary.write_key(&mut f, "HDUNAME", "VX").unwrap();
        for (k, v) in &strings {
            primary.write_key(&mut f, k, *v).unwrap();
        }
        for (k, v) in &numbers {
            primary.write_key(&mut f, k, *v).unwrap();
        }
        primary.write_image(&mut f, &data).unwrap();
        for name in ["VY", "VZ"] {
            // Geometry only on the primary: the images inherit it.
            let hdu = f.create_image(name, &description).unwrap();
            hdu.write_key(&mut f, "BUNIT", "km/s").unwrap();
            hdu.write_image(&mut f, &data).unwrap();
        }
    }
    assert_eq!(read_field(&path, None, None).unwrap(), grid);

    // Missing FS_CELL.
    let path = dir.path().join("nospace.fits");
    write_foreign_fits(&path, &all, &strings, &numbers[..3]);
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(
        e.contains("nospace.fits") && e.contains("FS_CELL") && e.contains("HDU VX"),
        "{e}"
    );

    // Missing FS_AXES: an error unless the caller gives the axes.
    let path = dir.path().join("noaxes.fits");
    write_foreign_fits(&path, &all, &[strings[0], strings[2]], &numbers);
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(e.contains("FS_AXES") && e.contains("noaxes.fits"), "{e}");
    let g = read_field(&path, Some(FieldAxes::Supergalactic), None).unwrap();
    assert_eq!(g.axes, FieldAxes::Supergalactic);

    // Missing BUNIT, and a wrong one.
    let path = dir.path().join("nobunit.fits");
    write_foreign_fits(&path, &all, &strings[1..], &numbers);
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(e.contains("BUNIT"), "{e}");
    let path = dir.path().join("wrongbunit.fits");
    write_foreign_fits(
        &path,
        &all,
        &[("BUNIT", "m/s"), strings[1], strings[2]],
        &numbers,
    );
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(e.contains("BUNIT = 'm/s'"), "{e}");

    // A missing component.
    let path = dir.path().join("novz.fits");
    write_foreign_fits(&path, &all[..2], &strings, &numbers);
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(e.contains("VZ") && e.contains("novz.fits"), "{e}");

    // Unknown extension.
    let e = message(read_field(&dir.path().join("x.dat"), None, None).unwrap_err());
    assert!(e.contains("x.dat"), "{e}");
}

#[test]
fn csv_and_parquet_round_trips() {
    let dir = tmp();
    let grid = small_grid(FieldAxes::Galactic, LengthUnit::MpcOverH);
    let close = |back: &VelocityGrid| {
        assert_eq!(back.shape, grid.shape);
        assert_eq!(back.axes, grid.axes);
        assert_eq!(back.length_unit, grid.length_unit);
        assert_eq!(back.v, grid.v);
        for a in 0..3 {
            assert!((back.origin[a] - grid.origin[a]).abs() < 1e-12);
        }
        assert!((back.spacing - grid.spacing).abs() < 1e-12 * grid.spacing);
    };
    let csv = dir.path().join("field.csv");
    write_field_table(&csv, &grid, &WriteOptions::default()).unwrap();
    close(&read_field(&csv, Some(FieldAxes::Galactic), Some(LengthUnit::MpcOverH)).unwrap());
    // Without hints a CSV is supergalactic and in Mpc.
    let plain = read_field(&csv, None, None).unwrap();
    assert_eq!(plain.axes, FieldAxes::Supergalactic);
    assert_eq!(plain.length_unit, LengthUnit::Mpc);

    let pq = dir.path().join("field.parquet");
    write_field_table(&pq, &grid, &WriteOptions::default()).unwrap();
    close(&read_field(&pq, Some(FieldAxes::Galactic), Some(LengthUnit::MpcOverH)).unwrap());

    // A FITS binary table without VX images is read as a table; its TUNITn give the length
    // unit, and a contradicting hint is refused.
    let fits_table = dir.path().join("table.fits");
    write_field_table(&fits_table, &grid, &WriteOptions::default()).unwrap();
    close(&read_field(&fits_table, Some(FieldAxes::Galactic), None).unwrap());
    let e = message(read_field(&fits_table, None, Some(LengthUnit::Mpc)).unwrap_err());
    assert!(e.contains("table.fits") && e.contains("Mpc/h"), "{e}");
}

/// A 3×3×2 grid of 2 Mpc cells from (10, −2, 0), rows shuffled, as CSV text; `edit` may
/// change the rows (x, y, z, vx, vy, vz) first.
fn grid_csv(path: &Path, edit: impl FnOnce(&mut Vec<[f64; 6]>)) {
    let mut rows = Vec::new();
    for k in 0..2 {
        for j in 0..3 {
            for i in 0..3 {
                let (x, y, z) = (10.0 + 2.0 * i as f64, -2.0 + 2.0 * j as f64, 2.0 * k as f64);
                rows.push([x, y, z, 100.0 * x, -y, z + 0.5]);
            }
        }
    }
    // A fixed shuffle.
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    for i in (1..rows.len()).rev() {
        let j = rng.random_range(0..=i);
        rows.swap(i, j);
    }
    edit(&mut rows);
    let mut text = String::from("x,y,z,vx,vy,vz,name\n");
    for r in &rows {
        text.push_str(&format!(
            "{},{},{},{},{},{},p\n",
            r[0], r[1], r[2], r[3], r[4], r[5]
        ));
    }
    std::fs::write(path, text).unwrap();
}

#[test]
fn shuffled_tables_read_and_irregular_tables_are_refused() {
    let dir = tmp();
    let path = dir.path().join("ok.csv");
    grid_csv(&path, |_| {});
    let g = read_field(&path, None, None).unwrap();
    assert_eq!(g.shape, [3, 3, 2]);
    assert_eq!(g.origin, [10.0, -2.0, 0.0]);
    assert_eq!(g.spacing, 2.0);
    for k in 0..2 {
        for j in 0..3 {
            for i in 0..3 {
                let p = g.cell_centre(i, j, k);
                assert_eq!(g.velocity_at(p).unwrap(), [100.0 * p[0], -p[1], p[2] + 0.5]);
            }
        }
    }

    // Row 5 moved off the lattice by 0.3 cells in y.
    let path = dir.path().join("shifted.csv");
    grid_csv(&path, |rows| rows[4][1] += 0.6);
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(
        e.contains("shifted.csv") && e.contains("row 5 ") && e.contains("along y"),
        "{e}"
    );

    // A point missing.
    let path = dir.path().join("missing.csv");
    grid_csv(&path, |rows| {
        rows.retain(|r| !(r[0] == 12.0 && r[1] == 0.0 && r[2] == 2.0));
    });
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(
        e.contains("missing.csv") && e.contains("missing point is (x = 12, y = 0, z = 2)"),
        "{e}"
    );

    // A point repeated (replacing another).
    let path = dir.path().join("repeat.csv");
    grid_csv(&path, |rows| {
        rows[7] = rows[2];
    });
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(e.contains("row 8 ") && e.contains("row 3"), "{e}");

    // Different spacing along z.
    let path = dir.path().join("anisotropic.csv");
    grid_csv(&path, |rows| {
        for r in rows.iter_mut() {
            r[2] *= 1.7;
        }
    });
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(
        e.contains("anisotropic.csv") && e.contains("along z"),
        "{e}"
    );

    // A missing column, and an empty entry.
    let path = dir.path().join("nocol.csv");
    std::fs::write(&path, "x,y,z,vx,vy\n0,0,0,1,1\n").unwrap();
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(e.contains("no column vz"), "{e}");
    let path = dir.path().join("empty.csv");
    std::fs::write(&path, "x,y,z,vx,vy,vz\n0,0,0,1,1,1\n1,0,0,1,,1\n").unwrap();
    let e = message(read_field(&path, None, None).unwrap_err());
    assert!(e.contains("row 2") && e.contains("vy"), "{e}");
}

// ---------------------------------------------------------------------------------------------
// (d) The combined model
// ---------------------------------------------------------------------------------------------

#[test]
fn flow_model_scales_by_beta_and_adds_the_external_flow() {
    let mut analytic = infall_model();
    analytic.bulk = [50.0, -20.0, 10.0];
    let grid = analytic.sample([-40.0; 3], 4.0, [21, 21, 21]).unwrap();
    let external = [-120.0, 35.0, 250.0];
    let beta = 0.43;
    let p = [12.3, -7.7, 25.1];
    let v_grid = grid.velocity_at(p).unwrap();
    let v_analytic = analytic.velocity_at(p);

    // Grid only: β v_grid + V_ext.
    let model = FlowModel {
        grid: Some(grid.clone()),
        analytic: None,
        beta,
        external,
        sigma_v: 150.0,
    };
    model.check().unwrap();
    let v = model.velocity(p).unwrap();
    for c in 0..3 {
        assert!((v[c] - (beta * v_grid[c] + external[c])).abs() < 1e-12 * (1.0 + v[c].abs()));
    }
    // Outside the grid: no prediction.
    assert_eq!(model.velocity([100.0, 0.0, 0.0]), None);
    assert_eq!(model.radial_velocity([100.0, 0.0, 0.0]), None);
    // Radial component, observer at the origin.
    let r = norm(p);
    let radial = (v[0] * p[0] + v[1] * p[1] + v[2] * p[2]) / r;
    assert!((model.radial_velocity(p).unwrap() - radial).abs() < 1e-9);

    // β = 0 leaves only V_ext; β = 1 without V_ext is the field itself.
    let zero = FlowModel {
        beta: 0.0,
        ..model.clone()
    };
    assert_eq!(zero.velocity(p).unwrap(), external);
    let unit = FlowModel {
        beta: 1.0,
        external: [0.0; 3],
        ..model.clone()
    };
    assert_eq!(unit.velocity(p).unwrap(), v_grid);

    // Analytic only: defined everywhere, bulk scaled by β too.
    let model = FlowModel {
        grid: None,
        analytic: Some(analytic.clone()),
        beta,
        external,
        sigma_v: 150.0,
    };
    let far = [500.0, 0.0, 0.0];
    let v = model.velocity(far).unwrap();
    let va = analytic.velocity_at(far);
    for c in 0..3 {
        assert!((v[c] - (beta * va[c] + external[c])).abs() < 1e-9);
    }

    // Both parts add before scaling.
    let model = FlowModel {
        grid: Some(grid.clone()),
        analytic: Some(analytic.clone()),
        beta,
        external,
        sigma_v: 150.0,
    };
    model.check().unwrap();
    let v = model.velocity(p).unwrap();
    for c in 0..3 {
        let want = beta * (v_grid[c] + v_analytic[c]) + external[c];
        assert!((v[c] - want).abs() < 1e-9, "{c}");
    }

    // Neither part: V_ext everywhere.
    let bare = FlowModel {
        grid: None,
        analytic: None,
        beta,
        external,
        sigma_v: 0.0,
    };
    assert_eq!(bare.velocity(far).unwrap(), external);

    // Mixed axes are refused.
    let mut other = analytic;
    other.axes = FieldAxes::Galactic;
    let mixed = FlowModel {
        grid: Some(grid),
        analytic: Some(other),
        beta,
        external,
        sigma_v: 150.0,
    };
    assert!(mixed.check().is_err());
}
