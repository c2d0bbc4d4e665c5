//! Radial peculiar velocities of linear theory drawn as a Gaussian random field on a periodic
//! grid and read off at the objects: the way `mock --correlated` draws more objects than a
//! Cholesky factorisation of their covariance can hold ([`super::correlated`]).
//!
//! # Method
//!
//! The standard Gaussian-random-field initial conditions of linear theory (the velocity
//! field of the Zel'dovich approximation): the density contrast δ is a Gaussian field with
//! power spectrum P(k), and the linear continuity equation ∇·v = −a H f δ gives
//! v(k) = i a H f δ(k) k/k² at each wavevector (Peebles 1980, *The Large-Scale Structure of
//! the Universe*, Princeton, §14 — from memory; the same relation as
//! [`velocity_from_density`](crate::physics::field::velocity_from_density)). At z = 0, in
//! h⁻¹ Mpc with H0 = 100 km/s per h⁻¹ Mpc.
//!
//! 1. The grid is a periodic cube of `cells`³ nodes spaced Δ, with the observer on node
//!    (0, 0, 0); a position x sits at lattice coordinate x/Δ, wrapped.
//! 2. White noise w_j ~ N(0, 1) is drawn at every node, in index order, from
//!    `ChaCha8Rng::seed_from_u64(seed)`, and transformed (forward FFT, ŵ_k = Σ_j w_j e^{−ik·x_j});
//!    a real field's transform is Hermitian, so δ(x) comes out real with no bookkeeping.
//! 3. δ̂_k = ŵ_k √(P(k)/Δ³), so that ⟨δ(x)²⟩ = V⁻¹ Σ_k P(k) (V = (cells Δ)³) — the
//!    discrete form of ∫ d³k/(2π)³ P(k). P is the spectrum for σ8 = 1 and f = 1, and the
//!    draw is scaled by fσ8, as the Cholesky path scales its covariance. Modes with
//!    |k| > k_max, the k = 0 mode (the mean) and the Nyquist planes (whose i k has no
//!    Hermitian partner) are zeroed.
//! 4. Each Cartesian component v̂_c = i H0 fσ8 k_c/k² δ̂_k is brought back by an inverse FFT
//!    (`rustfft`, the project's rotating 3-D transform), read off at each object by trilinear
//!    (cloud-in-cell) interpolation of the eight nodes around it, and projected on the line
//!    of sight n̂ = x/|x|.
//!
//! The draw depends on the seed alone (noise drawn in a fixed order, transforms and
//! interpolation done slab by slab or object by object), not on the number of threads.
//!
//! # What it misses
//!
//! The periodic box holds only wavevectors on its lattice: the modes longer than the box
//! (|k| ≲ 2π/L) are absent, and the lattice sum stands in for the k integral. The
//! interpolation smooths: averaged over places in a cell it multiplies each mode's variance
//! by Π_a [2/3 + cos(k_a Δ)/3] (the mean of the squared trilinear weights, E[t²] = 1/3,
//! E[t(1 − t)] = 1/6 per axis). It is not deconvolved (that would make the variance depend
//! on the place in the cell); it is counted instead. The one-point variance the draw carries,
//! [`captured_variance`] = H0² (fσ8)² (3V)⁻¹ Σ_k P(k)/k² Π_a [2/3 + cos(k_a Δ)/3], is
//! therefore below the covariance's σ_v² = (fσ8 H0)²/(6π²) ∫_0^{k_max} P dk; the caller
//! reports the fraction. Periodic images also correlate objects about L − s apart as well as
//! s apart, which is why the box is made at least three times the largest distance and
//! 800 h⁻¹ Mpc a side ([`field_grid_for`]).

use std::f64::consts::PI;

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;
use rustfft::num_complex::Complex;
use rustfft::FftPlanner;
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::power::{fft3, LinearPower, H0_KM_S_PER_MPC_H};

/// Fewest cells a side of the grid.
pub const FIELD_CELLS_MIN: usize = 32;
/// Most cells a side: three complex arrays of 192³ values, about 340 MB.
pub const FIELD_CELLS_MAX: usize = 192;
/// Least padding (h⁻¹ Mpc) between the far sides of the survey and their periodic images.
pub const FIELD_PADDING_MIN: f64 = 200.0;
/// Smallest side of the box, h⁻¹ Mpc: below it the modes longer than the box carry more
/// than a few per cent of σ_v² (measured: 5.7 % at 480 h⁻¹ Mpc for k_max = 0.2,
/// tests/random_field.rs), and a grid of this side costs little (about 108³ cells).
pub const FIELD_SIDE_MIN: f64 = 800.0;

/// A periodic cubic grid with the observer on a node.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct FieldGrid {
    /// Nodes a side.
    pub cells: usize,
    /// Node spacing Δ, h⁻¹ Mpc.
    pub spacing: f64,
}

impl FieldGrid {
    /// The side L = cells Δ of the box, h⁻¹ Mpc.
    pub fn side(&self) -> f64 {
        self.cells as f64 * self.spacing
    }

    /// The Nyquist wavenumber π/Δ, h Mpc⁻¹.
    pub fn nyquist(&self) -> f64 {
        PI / self.spacing
    }

    /// The fundamental wavenumber 2π/L, h Mpc⁻¹.
    pub fn fundamental(&self) -> f64 {
        2.0 * PI / self.side()
    }
}

/// The grid for objects out to `largest_distance` (h⁻¹ Mpc) and modes up to `k_max`
/// (h Mpc⁻¹): a box of side L = 2 D_max + max(D_max, [`FIELD_PADDING_MIN`]), and at least
/// [`FIELD_SIDE_MIN`], so that the nearest periodic image of any object is at least
/// max(D_max, 200 h⁻¹ Mpc) from every other object, and cells no wider than π/(2 k_max) (Nyquist twice k_max), rounded up to an even
/// count with no prime factor above 5 and kept within [`FIELD_CELLS_MIN`] …
/// [`FIELD_CELLS_MAX`]. Past the largest count the cells widen instead (and above
/// about 1 500 h⁻¹ Mpc the Nyquist frequency falls below k_max; the captured variance says
/// what is lost).
pub fn field_grid_for(largest_distance: f64, k_max: f64) -> FieldGrid {
    let d = if largest_distance.is_finite() {
        largest_distance.max(0.0)
    } else {
        0.0
    };
    let side = (2.0 * d + d.max(FIELD_PADDING_MIN)).max(FIELD_SIDE_MIN);
    let wanted = (side * 2.0 * k_max / PI).ceil();
    let cells = if wanted.is_finite() && wanted < FIELD_CELLS_MAX as f64 {
        smooth_even_at_least((wanted as usize).max(FIELD_CELLS_MIN)).min(FIELD_CELLS_MAX)
    } else {
        FIELD_CELLS_MAX
    };
    FieldGrid {
        cells,
        spacing: side / cells as f64,
    }
}

/// The smallest even n ≥ `at_least` whose prime factors are 2, 3 and 5 (fast FFT sizes).
fn smooth_even_at_least(at_least: usize) -> usize {
    let mut n = at_least.max(2);
    loop {
        if n.is_multiple_of(2) {
            let mut r = n;
            for p in [2, 3, 5] {
                while r.is_multiple_of(p) {
                    r /= p;
                }
            }
            if r == 1 {
                return n;
            }
        }
        n += 1;
    }
}

/// The draw and how it was made.
#[derive(Debug, Clone, PartialEq)]
pub struct FieldDraw {
    /// Radial velocity of each object, km/s.
    pub velocities: Vec<f64>,
    /// The grid used.
    pub grid: FieldGrid,
    /// One-point variance of the radial velocities the draw carries, (km/s)², averaged over
    /// places in a cell ([`captured_variance`] at this fσ8).
    pub captured_variance: f64,
    /// Independent wavevectors kept (half the nonzero lattice modes with 0 < |k| ≤ k_max).
    pub modes: usize,
}

/// Signed wavenumber (h Mpc⁻¹) of index `i` on an axis of `m` cells, None on the Nyquist
/// plane.
fn wavenumber(i: usize, m: usize, fundamental: f64) -> Option<f64> {
    if m.is_multiple_of(2) && i == m / 2 {
        None
    } else if i <= m / 2 {
        Some(fundamental * i as f64)
    } else {
        Some(fundamental * (i as f64 - m as f64))
    }
}

/// P(k) for σ8 of `power` at every squared lattice index n² = i² + j² + l² up to k_max
/// (k = 2π √n² / L); zero above.
fn power_by_index(power: &LinearPower, grid: &FieldGrid, k_max: f64) -> Vec<f64> {
    let m = grid.cells as i64;
    let half = m / 2;
    let n2_max = (3 * half * half) as usize;
    let kf = grid.fundamental();
    (0..=n2_max)
        .into_par_iter()
        .map(|n2| {
            let k = kf * (n2 as f64).sqrt();
            if n2 == 0 || k > k_max {
                0.0
            } else {
                power.pk(k)
            }
        })
        .collect()
}

fn check_grid(grid: &FieldGrid, k_max: f64) -> Result<(), String> {
    if !(4..=FIELD_CELLS_MAX).contains(&grid.cells) {
        return Err(format!(
            "the random-field grid must have 4 to {FIELD_CELLS_MAX} cells a side, got {}",
            grid.cells
        ));
    }
    if !(grid.spacing.is_finite() && grid.spacing > 0.0) {
        return Err(format!(
            "the random-field grid spacing must be a positive number, got {}",
            grid.spacing
        ));
    }
    if !(k_max.is_finite() && k_max > 0.0) {
        return Err(format!("k_max must be a positive number, got {k_max}"));
    }
    Ok(())
}

/// The one-point variance (km/s)² of the radial velocity of a [`draw_field`] draw with
/// fσ8 = 1 (`power` normalised to σ8 = 1), averaged over places in a cell:
/// H0² (3V)⁻¹ Σ_{0<|k|≤k_max} P(k)/k² Π_a [2/3 + cos(k_a Δ)/3], Nyquist planes left out.
pub fn captured_variance(power: &LinearPower, grid: &FieldGrid, k_max: f64) -> f64 {
    let table = power_by_index(power, grid, k_max);
    captured_from_table(&table, grid)
}

fn captured_from_table(table: &[f64], grid: &FieldGrid) -> f64 {
    let smoothing = |k: f64| 2.0 / 3.0 + (k * grid.spacing).cos() / 3.0;
    let sum = lattice_sum(table, grid, |[kx, ky, kz], p| {
        let k2 = kx * kx + ky * ky + kz * kz;
        p / k2 * smoothing(kx) * smoothing(ky) * smoothing(kz)
    });
    H0_KM_S_PER_MPC_H * H0_KM_S_PER_MPC_H * sum / (3.0 * grid.side().powi(3))
}

/// Σ term(k, P) over the grid's modes whose tabulated power `table` is not zero (the zero
/// mode, the Nyquist planes and modes above k_max have none), summed plane by plane in
/// parallel and then in plane order, so that the result does not depend on the threads.
fn lattice_sum(table: &[f64], grid: &FieldGrid, term: impl Fn([f64; 3], f64) -> f64 + Sync) -> f64 {
    let m = grid.cells;
    let kf = grid.fundamental();
    let partial: Vec<f64> = (0..m)
        .into_par_iter()
        .map(|x| {
            let mut s = 0.0;
            let Some(kx) = wavenumber(x, m, kf) else {
                return 0.0;
            };
            for y in 0..m {
                let Some(ky) = wavenumber(y, m, kf) else {
                    continue;
                };
                for z in 0..m {
                    let Some(kz) = wavenumber(z, m, kf) else {
                        continue;
                    };
                    let p = table[lattice_n2(x, y, z, m)];
                    if p == 0.0 {
                        continue;
                    }
                    s += term([kx, ky, kz], p);
                }
            }
            s
        })
        .collect();
    partial.iter().sum()
}

/// i² + j² + l² of the signed lattice indices of (x, y, z).
fn lattice_n2(x: usize, y: usize, z: usize, m: usize) -> usize {
    let s = |i: usize| -> usize {
        let j = if i <= m / 2 { i } else { m - i };
        j * j
    };
    s(x) + s(y) + s(z)
}

/// ⟨v_a v_b⟩ (km/s)² of the radial velocities of a [`draw_field`] draw with fσ8 = 1 at two
/// grid nodes `a` and `b` (h⁻¹ Mpc, non-zero; at nodes the interpolation is exact), by the
/// lattice sum H0² V⁻¹ Σ_{0<|k|≤k_max} P(k) (n̂_a·k)(n̂_b·k)/k⁴ cos(k·(a − b)): the covariance
/// the periodic field has in place of the continuous one.
pub fn field_pair_covariance(
    power: &LinearPower,
    grid: &FieldGrid,
    k_max: f64,
    a: [f64; 3],
    b: [f64; 3],
) -> f64 {
    let table = power_by_index(power, grid, k_max);
    let na = unit(a);
    let nb = unit(b);
    let d = [a[0] - b[0], a[1] - b[1], a[2] - b[2]];
    let sum = lattice_sum(&table, grid, |[kx, ky, kz], p| {
        let k2 = kx * kx + ky * ky + kz * kz;
        let pa = na[0] * kx + na[1] * ky + na[2] * kz;
        let pb = nb[0] * kx + nb[1] * ky + nb[2] * kz;
        let phase = kx * d[0] + ky * d[1] + kz * d[2];
        p * pa * pb / (k2 * k2) * phase.cos()
    });
    H0_KM_S_PER_MPC_H * H0_KM_S_PER_MPC_H * sum / grid.side().powi(3)
}

fn unit(r: [f64; 3]) -> [f64; 3] {
    let n = (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]).sqrt();
    [r[0] / n, r[1] / n, r[2] / n]
}

/// Draw radial velocities at `positions` (h⁻¹ Mpc, observer at the origin, each non-zero
/// and inside the box: |x_a| < L/2) by the method of the module documentation, on `grid`,
/// with modes up to `k_max` (h Mpc⁻¹), `power` normalised to σ8 = 1 and amplitude `fsigma8`.
pub fn draw_field(
    power: &LinearPower,
    positions: &[[f64; 3]],
    fsigma8: f64,
    k_max: f64,
    grid: FieldGrid,
    seed: u64,
) -> Result<FieldDraw, String> {
    check_grid(&grid, k_max)?;
    if !(fsigma8.is_finite() && fsigma8 >= 0.0) {
        return Err(format!("fσ8 must be a non-negative number, got {fsigma8}"));
    }
    let half_side = 0.5 * grid.side();
    for (i, r) in positions.iter().enumerate() {
        let norm2 = r[0] * r[0] + r[1] * r[1] + r[2] * r[2];
        if !(norm2.is_finite() && norm2 > 0.0) || r.iter().any(|c| c.abs() >= half_side) {
            return Err(format!(
                "object {i} at ({}, {}, {}) h⁻¹ Mpc is at the observer or outside the random-field box of side {} h⁻¹ Mpc",
                r[0],
                r[1],
                r[2],
                grid.side()
            ));
        }
    }
    let m = grid.cells;
    let cells = m * m * m;
    let kf = grid.fundamental();
    let table = power_by_index(power, &grid, k_max);

    // White noise in index order, then its transform.
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut delta: Vec<Complex<f64>> = (0..cells)
        .map(|_| Complex::new(StandardNormal.sample(&mut rng), 0.0))
        .collect();
    let mut planner = FftPlanner::<f64>::new();
    let forward = planner.plan_fft_forward(m);
    let inverse = planner.plan_fft_inverse(m);
    fft3(&mut delta, m, forward.as_ref());

    // δ̂ = ŵ √(P/Δ³) fσ8, cut; count the kept modes.
    let scale = fsigma8 / grid.spacing.powf(1.5);
    let kept: usize = delta
        .par_chunks_mut(m * m)
        .enumerate()
        .map(|(x, slab)| {
            let mut kept = 0;
            for y in 0..m {
                for z in 0..m {
                    let cell = &mut slab[y * m + z];
                    let on_lattice = wavenumber(x, m, kf).is_some()
                        && wavenumber(y, m, kf).is_some()
                        && wavenumber(z, m, kf).is_some();
                    let p = if on_lattice {
                        table[lattice_n2(x, y, z, m)]
                    } else {
                        0.0
                    };
                    if p > 0.0 {
                        kept += 1;
                    }
                    *cell *= scale * p.sqrt();
                }
            }
            kept
        })
        .sum();

    // Each component: v̂_c = i H0 k_c/k² δ̂, inverse FFT, interpolate, project.
    let unit_vectors: Vec<[f64; 3]> = positions.iter().map(|&r| unit(r)).collect();
    let mut radial = vec![0.0; positions.len()];
    let mut component = vec![Complex::new(0.0, 0.0); cells];
    let norm = 1.0 / cells as f64;
    for c in 0..3 {
        component
            .par_chunks_mut(m * m)
            .zip(delta.par_chunks(m * m))
            .enumerate()
            .for_each(|(x, (out, dslab))| {
                for y in 0..m {
                    for z in 0..m {
                        let l = y * m + z;
                        let k = [
                            wavenumber(x, m, kf),
                            wavenumber(y, m, kf),
                            wavenumber(z, m, kf),
                        ];
                        out[l] = match k {
                            [Some(kx), Some(ky), Some(kz)]
                                if dslab[l] != Complex::new(0.0, 0.0) =>
                            {
                                let k2 = kx * kx + ky * ky + kz * kz;
                                let kc = [kx, ky, kz][c];
                                Complex::new(0.0, H0_KM_S_PER_MPC_H * kc / k2) * dslab[l]
                            }
                            _ => Complex::new(0.0, 0.0),
                        };
                    }
                }
            });
        fft3(&mut component, m, inverse.as_ref());
        let field = &component;
        radial
            .par_iter_mut()
            .zip(positions.par_iter().zip(&unit_vectors))
            .for_each(|(v, (r, n))| {
                *v += n[c] * norm * trilinear(field, m, grid.spacing, r);
            });
    }

    Ok(FieldDraw {
        velocities: radial,
        grid,
        captured_variance: fsigma8 * fsigma8 * captured_from_table(&table, &grid),
        modes: kept / 2,
    })
}

/// The real part of `field` (a periodic cube of side `m`, spacing `spacing`, node 0 at the
/// origin) at `r` by trilinear interpolation of the eight surrounding nodes.
fn trilinear(field: &[Complex<f64>], m: usize, spacing: f64, r: &[f64; 3]) -> f64 {
    let mut lo = [0usize; 3];
    let mut t = [0.0; 3];
    for a in 0..3 {
        let u = r[a] / spacing;
        let f = u.floor();
        t[a] = u - f;
        lo[a] = (f as i64).rem_euclid(m as i64) as usize;
    }
    let mut v = 0.0;
    for q in 0..8 {
        let mut w = 1.0;
        let mut i = [0usize; 3];
        for a in 0..3 {
            if q >> a & 1 == 1 {
                w *= t[a];
                i[a] = (lo[a] + 1) % m;
            } else {
                w *= 1.0 - t[a];
                i[a] = lo[a];
            }
        }
        v += w * field[(i[0] * m + i[1]) * m + i[2]].re;
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The grid rule: box at least 2 D + max(D, 200), cells even and 5-smooth, spacing at
    /// most π/(2 k_max) until the cap (arithmetic on the rule stated in the doc comment).
    #[test]
    fn grid_follows_its_rule() {
        let g = field_grid_for(300.0, 0.2);
        assert!(g.side() >= 2.0 * 300.0 + 300.0 - 1e-9);
        assert!(g.spacing <= PI / 0.4 + 1e-12);
        assert!(g.cells.is_multiple_of(2) && g.cells >= FIELD_CELLS_MIN);
        assert_eq!(g.cells, 120); // 900 / 7.854 = 114.6 → 115 → 120, the first even 5-smooth count
        let near = field_grid_for(50.0, 0.2);
        assert!((near.side() - FIELD_SIDE_MIN).abs() < 1e-9);
        assert_eq!(near.cells, 108); // 800 / 7.854 = 101.9 → 102 → 108 = 2² 3³
        let far = field_grid_for(2000.0, 0.2);
        assert_eq!(far.cells, FIELD_CELLS_MAX);
        assert!((far.side() - 6000.0).abs() < 1e-9);
        assert_eq!(smooth_even_at_least(57), 60);
        assert_eq!(smooth_even_at_least(61), 64);
    }

    /// The white-noise field of one seed is the same twice, and a different seed differs.
    #[test]
    fn draws_are_reproducible() {
        let power = LinearPower::new(crate::physics::power::PowerParams {
            sigma8: 1.0,
            ..crate::physics::power::PowerParams::planck2018()
        });
        let grid = FieldGrid {
            cells: 16,
            spacing: 10.0,
        };
        let pos = [[30.0, 5.0, -12.0], [-40.0, 22.0, 3.0]];
        let a = draw_field(&power, &pos, 0.45, 0.2, grid, 7).unwrap();
        let b = draw_field(&power, &pos, 0.45, 0.2, grid, 7).unwrap();
        let c = draw_field(&power, &pos, 0.45, 0.2, grid, 8).unwrap();
        assert_eq!(a, b);
        assert_ne!(a.velocities, c.velocities);
        assert!(draw_field(&power, &[[90.0, 0.0, 0.0]], 0.45, 0.2, grid, 7).is_err());
    }
}
