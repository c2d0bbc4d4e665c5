//! The ΛCDM covariance of a weighted bulk-flow estimate in O(N + M³ log M): the pair sum
//! of [`lcdm_bulk_flow_covariance_by_separation`](super::lcdm_bulk_flow_covariance_by_separation)
//! as a convolution of gridded weights with the velocity correlation tensor, done by FFT on
//! a zero-padded mesh; and the choice between it and the exact pair sum.
//!
//! # Method
//!
//! The pair covariance of radial velocities is ⟨v_m v_n⟩ = (H0 f)²/(2π²) r̂_m,a r̂_n,b
//! Ψ_ab(x_m − x_n), with the velocity correlation tensor Ψ_ab(A) = Ψ1(A) δ_ab − Ψ2(A) Â_a Â_b
//! (Górski 1988, ApJ 332, L7; Ψ1, Ψ2 the k integrals of the [`SeparationTable`]). It depends
//! on the pair only through the separation vector, so the window pair sum
//!
//! R_ij = (H0 f)²/(2π²) Σ_m Σ_n G_ia(x_m) Ψ_ab(x_m − x_n) G_jb(x_n),  G_ia(x_m) = w_im r̂_m,a,
//!
//! is the quadratic form of a convolution. The nine fields G_ia are assigned to a cubic mesh
//! of M cells a side that covers the sample (cloud-in-cell), the tensor Ψ_ab is tabulated
//! at every mesh offset from the exact k integrals, and the convolution is done by FFT on a
//! mesh of twice that side with the fields zero-padded, so that no periodic image of one
//! object reaches another: Hockney & Eastwood's method for isolated systems (R. W. Hockney &
//! J. W. Eastwood, *Computer Simulation Using Particles*, McGraw-Hill 1981, ch. 6 — from
//! memory), the same doubling as [`velocity_from_density_isolated`](crate::physics::field::velocity_from_density_isolated).
//! By Parseval the quadratic form is (2M)⁻³ Σ_k Σ_ab Re[Ĝ_ia(k)* Ψ̂_ab(k) Ĝ_jb(k)]; Ψ_ab is real
//! and even, so Ψ̂_ab is real. No inverse transform is needed.
//!
//! Because the kernel is tabulated in real space from the full k integrals (10⁻¹⁰ … 10³
//! h Mpc⁻¹), nothing is lost above the mesh Nyquist frequency and nothing aliases: the one
//! approximation is that each object's weight is spread over the eight nearest mesh nodes,
//! i.e. that Ψ_ab is replaced by its bilinear interpolation in both ends of the pair. On
//! average over the objects' places in their cells that adds (h²/6)∇²Ψ (h the cell side),
//! so the kernel put on the mesh is Ψ − (h²/6)∇²Ψ (central differences), which leaves an
//! error of order (h/ℓ)⁴ with ℓ the tens of h⁻¹ Mpc on which the velocity correlation
//! varies (it is weighted by P(k) dk, not k² P(k) dk). The self pairs, where the kernel has
//! its sharpest peak, are corrected exactly: each object's own mesh term is replaced by
//! w_im w_jm Ψ1(0). Pairs within a cell or two keep an interpolation error; their share of
//! R is small once the sample is large, which is why small samples use the exact pair sum
//! ([`MESH_CROSSOVER`]). Measured agreement: see [`MESH_MAX_SPACING`].
//!
//! Cost: nine forward FFTs of the fields and six of the kernel on (2M)³ points, O(N) for the
//! assignment and the self correction; memory about eleven complex arrays of (2M)³ values
//! (16 bytes each; 370 MB for M = 64).

use std::f64::consts::PI;

use rayon::prelude::*;
use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};

use super::spectrum::LinearPower;
use super::window::{lcdm_bulk_flow_covariance_by_separation, SeparationTable};
use super::H0_KM_S_PER_MPC_H;

/// Below this many objects [`lcdm_bulk_flow_covariance_auto`] sums every pair exactly when
/// the mesh has [`MESH_CELLS_MIN`] cells (the threshold grows as cells^1.5 for finer meshes,
/// with the mesh's cost). Chosen from measurement (DEVELOPERS.md, "The ΛCDM window"): the
/// exact sum costs about 8 N² ns on two cores, a 32-cell mesh about half a second whatever
/// N, so the two cost the same near 8 000 objects.
pub const MESH_CROSSOVER: usize = 8_000;

/// Fewest and most mesh cells along the largest side of the sample's bounding box (the
/// FFTs run on twice this).
pub const MESH_CELLS_MIN: usize = 32;
/// See [`MESH_CELLS_MIN`]; memory ≈ 11 × 16 × (2 × 64)³ bytes ≈ 370 MB at this size.
pub const MESH_CELLS_MAX: usize = 64;
/// The cell side (h⁻¹ Mpc) the mesh aims at within those bounds.
pub const MESH_TARGET_SPACING: f64 = 12.0;
/// The coarsest cell side (h⁻¹ Mpc) the mesh is used with; beyond it (samples wider than
/// about 1 300 h⁻¹ Mpc) the exact pair sum is used whatever N. Measured agreement with the
/// exact sum: ≤ 5 × 10⁻⁴ of the largest diagonal entry for cells ≤ 13 h⁻¹ Mpc, 1.4–8 × 10⁻³
/// at 20 h⁻¹ Mpc, 0.4–2 × 10⁻² at 25 h⁻¹ Mpc (tests/lcdm_window.rs samples).
pub const MESH_MAX_SPACING: f64 = 20.0;

/// How [`lcdm_bulk_flow_covariance_auto`] summed the pairs.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum WindowMethod {
    /// Every pair, with the k integrals tabulated by separation.
    ExactPairSum,
    /// The FFT mesh: `cells` a side over the sample (cell side `spacing` h⁻¹ Mpc), FFTs on
    /// `2 × cells` a side.
    Mesh { cells: usize, spacing: f64 },
}

/// Cells a side for a sample whose bounding box is `extent` h⁻¹ Mpc on its largest side.
pub fn mesh_cells_for(extent: f64) -> usize {
    let wanted = (extent / MESH_TARGET_SPACING).ceil() + 1.0;
    if wanted.is_finite() {
        (wanted as usize).clamp(MESH_CELLS_MIN, MESH_CELLS_MAX)
    } else {
        MESH_CELLS_MAX
    }
}

/// The expected covariance R_ij (km/s)² of a bulk-flow estimate u_i = Σ_n w_in v_n, as
/// [`lcdm_bulk_flow_covariance_by_separation`] computes it: by that exact pair sum for
/// fewer than [`MESH_CROSSOVER`] × (cells/32)^1.5 objects or when the cell side would exceed
/// [`MESH_MAX_SPACING`], else by [`lcdm_bulk_flow_covariance_mesh`] with
/// [`mesh_cells_for`] cells. Returns the matrix and the method used.
///
/// # Panics
/// If `positions` and `weights` differ in length.
pub fn lcdm_bulk_flow_covariance_auto(
    power: &LinearPower,
    growth_rate: f64,
    positions: &[[f64; 3]],
    weights: &[[f64; 3]],
) -> ([[f64; 3]; 3], WindowMethod) {
    let extent = bounding_box(positions)
        .map(|(lo, hi)| (0..3).map(|a| hi[a] - lo[a]).fold(0.0_f64, f64::max))
        .unwrap_or(0.0);
    let cells = mesh_cells_for(extent);
    let spacing = extent / (cells - 1) as f64;
    let threshold = MESH_CROSSOVER as f64 * (cells as f64 / MESH_CELLS_MIN as f64).powf(1.5);
    if (positions.len() as f64) < threshold || spacing > MESH_MAX_SPACING {
        (
            lcdm_bulk_flow_covariance_by_separation(power, growth_rate, positions, weights),
            WindowMethod::ExactPairSum,
        )
    } else {
        let (r, spacing) =
            lcdm_bulk_flow_covariance_mesh(power, growth_rate, positions, weights, cells);
        (r, WindowMethod::Mesh { cells, spacing })
    }
}

/// The smallest and largest coordinates of `positions` (None if empty).
fn bounding_box(positions: &[[f64; 3]]) -> Option<([f64; 3], [f64; 3])> {
    if positions.is_empty() {
        return None;
    }
    let mut lo = [f64::INFINITY; 3];
    let mut hi = [f64::NEG_INFINITY; 3];
    for r in positions {
        for a in 0..3 {
            lo[a] = lo[a].min(r[a]);
            hi[a] = hi[a].max(r[a]);
        }
    }
    Some((lo, hi))
}

/// Index pairs (a, b), a ≤ b, of the six independent components of Ψ_ab.
const SYM: [(usize, usize); 6] = [(0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2)];

/// The same covariance as [`lcdm_bulk_flow_covariance_by_separation`] (objects at
/// `positions`, h⁻¹ Mpc, observer at the origin, positions non-zero; `weights[n]` =
/// [w_0n, w_1n, w_2n]) by the FFT mesh of the module documentation with `cells` (≥ 2) cells
/// along the largest side of the bounding box. Returns R (km/s)² and the cell side
/// (h⁻¹ Mpc). Deterministic whatever the thread count.
///
/// # Panics
/// If `positions` and `weights` differ in length or `cells < 2`.
pub fn lcdm_bulk_flow_covariance_mesh(
    power: &LinearPower,
    growth_rate: f64,
    positions: &[[f64; 3]],
    weights: &[[f64; 3]],
    cells: usize,
) -> ([[f64; 3]; 3], f64) {
    assert_eq!(
        positions.len(),
        weights.len(),
        "lcdm_bulk_flow_covariance_mesh: one weight triple per position"
    );
    assert!(
        cells >= 2,
        "lcdm_bulk_flow_covariance_mesh: at least 2 cells"
    );
    let h0f = H0_KM_S_PER_MPC_H * growth_rate;
    let scale = h0f * h0f / (2.0 * PI * PI);
    let Some((lo, hi)) = bounding_box(positions) else {
        return ([[0.0; 3]; 3], 0.0);
    };
    let extent = (0..3).map(|a| hi[a] - lo[a]).fold(0.0_f64, f64::max);
    let n = cells;
    let spacing = if extent > 0.0 {
        extent / (n - 1) as f64
    } else {
        1.0
    };
    let m = 2 * n;
    let table = SeparationTable::new(power, spacing * (n as f64) * 3.0_f64.sqrt() * 1.01);

    // Cloud-in-cell: the lower corner index and the fractions along each axis.
    let assign = |r: &[f64; 3]| -> ([usize; 3], [f64; 3]) {
        let mut c = [0usize; 3];
        let mut t = [0.0; 3];
        for a in 0..3 {
            let u = ((r[a] - lo[a]) / spacing).clamp(0.0, (n - 1) as f64);
            let i = (u.floor() as usize).min(n - 2);
            c[a] = i;
            t[a] = u - i as f64;
        }
        (c, t)
    };
    let corner_weights = |t: &[f64; 3]| -> [f64; 8] {
        let mut out = [0.0; 8];
        for (q, o) in out.iter_mut().enumerate() {
            let f = |a: usize| if q >> a & 1 == 1 { t[a] } else { 1.0 - t[a] };
            *o = f(0) * f(1) * f(2);
        }
        out
    };
    let idx = |x: usize, y: usize, z: usize| (x * m + y) * m + z;

    let mut planner = FftPlanner::<f64>::new();
    let fft = planner.plan_fft_forward(m);

    // The nine fields G_ia, transformed.
    let mut fields: Vec<Vec<Complex<f64>>> = Vec::with_capacity(9);
    for i in 0..3 {
        for a in 0..3 {
            let mut g = vec![Complex::new(0.0, 0.0); m * m * m];
            for (r, w) in positions.iter().zip(weights) {
                let norm = (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]).sqrt();
                let value = w[i] * r[a] / norm;
                let (c, t) = assign(r);
                let cw = corner_weights(&t);
                for (q, &v) in cw.iter().enumerate() {
                    let (dx, dy, dz) = (q & 1, q >> 1 & 1, q >> 2 & 1);
                    g[idx(c[0] + dx, c[1] + dy, c[2] + dz)].re += value * v;
                }
            }
            fft3(&mut g, m, fft.as_ref());
            fields.push(g);
        }
    }

    // Ψ1 and Ψ2/A² at every offset o ∈ [−n, n]³ (cells), once; Ψ_ab(o) = Ψ1 δ_ab −
    // (Ψ2/A²) (o_a h)(o_b h).
    let e = 2 * n + 1;
    let eidx = |o: [i64; 3]| -> usize {
        let u = |v: i64| (v + n as i64) as usize;
        (u(o[0]) * e + u(o[1])) * e + u(o[2])
    };
    let psi: Vec<(f64, f64)> = (0..e * e * e)
        .into_par_iter()
        .map(|l| {
            let o = [
                (l / (e * e)) as f64 - n as f64,
                (l / e % e) as f64 - n as f64,
                (l % e) as f64 - n as f64,
            ];
            let sep2 = (o[0] * o[0] + o[1] * o[1] + o[2] * o[2]) * spacing * spacing;
            if sep2 == 0.0 {
                (table.self_pair(), 0.0)
            } else {
                let (p1, p2) = table.psi(sep2.sqrt());
                (p1, p2 / sep2)
            }
        })
        .collect();
    let raw = |o: [i64; 3], a: usize, b: usize| -> f64 {
        let (p1, q) = psi[eidx(o)];
        let delta = if a == b { p1 } else { 0.0 };
        delta - q * (o[a] as f64 * spacing) * (o[b] as f64 * spacing)
    };
    // The kernel put on the mesh, at offsets |o_a| ≤ n − 1: Ψ − (h²/6) ∇²Ψ with the
    // Laplacian by central differences, which cancels the mean second-order bias of
    // interpolating both ends of a pair (measured: the error falls from ~h² to ~h⁴).
    let corrected = |o: [i64; 3], a: usize, b: usize| -> f64 {
        let centre = raw(o, a, b);
        let mut lap = 0.0;
        for axis in 0..3 {
            let mut up = o;
            up[axis] += 1;
            let mut down = o;
            down[axis] -= 1;
            lap += raw(up, a, b) + raw(down, a, b) - 2.0 * centre;
        }
        centre - lap / 6.0
    };
    // Wrapped offset of a padded index (index n is never a difference of two mesh nodes
    // and holds zero).
    let offset = |p: usize| -> Option<i64> {
        if p < n {
            Some(p as i64)
        } else if p > n {
            Some(p as i64 - m as i64)
        } else {
            None
        }
    };

    let mut sums = [0.0; 9]; // (i, j) → sums[3i + j], the mesh quadratic forms
    let norm = 1.0 / (m * m * m) as f64;
    for &(a, b) in &SYM {
        let mut kernel = vec![Complex::new(0.0, 0.0); m * m * m];
        kernel
            .par_chunks_mut(m * m)
            .enumerate()
            .for_each(|(x, slab)| {
                let Some(ox) = offset(x) else { return };
                for y in 0..m {
                    let Some(oy) = offset(y) else { continue };
                    for z in 0..m {
                        let Some(oz) = offset(z) else { continue };
                        slab[y * m + z].re = corrected([ox, oy, oz], a, b);
                    }
                }
            });
        fft3(&mut kernel, m, fft.as_ref());
        // Σ_k K̂(k) Re[Ĝ_ia* Ĝ_jb] (+ the (b, a) term for a ≠ b), in fixed chunks summed in
        // order.
        let chunk = m * m;
        let partial: Vec<[f64; 9]> = (0..m)
            .into_par_iter()
            .map(|x| {
                let mut s = [0.0; 9];
                for l in x * chunk..(x + 1) * chunk {
                    let k = kernel[l].re;
                    for i in 0..3 {
                        for j in 0..3 {
                            let gi = fields[3 * i + a][l];
                            let gj = fields[3 * j + b][l];
                            let mut v = gi.re * gj.re + gi.im * gj.im;
                            if a != b {
                                let gi2 = fields[3 * i + b][l];
                                let gj2 = fields[3 * j + a][l];
                                v += gi2.re * gj2.re + gi2.im * gj2.im;
                            }
                            s[3 * i + j] += k * v;
                        }
                    }
                }
                s
            })
            .collect();
        for p in &partial {
            for (t, v) in sums.iter_mut().zip(p) {
                *t += v * norm;
            }
        }
    }
    drop(fields);

    // Self correction: replace each object's own mesh term Σ_ab G_ia G_jb Σ_{c,d} W_c W_d
    // Ψ_ab(x_c − x_d) by the exact w_i w_j Ψ1(0). The offsets x_c − x_d between two corners
    // of one cell are 0 or ±1 cell per axis.
    let mut near = [[[[0.0; 6]; 3]; 3]; 3]; // near[dx+1][dy+1][dz+1][component]
    for (ix, plane) in near.iter_mut().enumerate() {
        for (iy, row) in plane.iter_mut().enumerate() {
            for (iz, cell) in row.iter_mut().enumerate() {
                let o = [ix as i64 - 1, iy as i64 - 1, iz as i64 - 1];
                for (c, &(a, b)) in SYM.iter().enumerate() {
                    cell[c] = corrected(o, a, b);
                }
            }
        }
    }
    let psi0 = table.self_pair();
    let corrections: Vec<[f64; 9]> = positions
        .par_chunks(4096)
        .zip(weights.par_chunks(4096))
        .map(|(rs, ws)| {
            let mut s = [0.0; 9];
            for (r, w) in rs.iter().zip(ws) {
                let (_, t) = assign(r);
                let cw = corner_weights(&t);
                let mut own = [0.0; 6];
                for (p, &wp) in cw.iter().enumerate() {
                    for (q, &wq) in cw.iter().enumerate() {
                        let d = |axis: usize| (p >> axis & 1) + 1 - (q >> axis & 1);
                        let cell = &near[d(0)][d(1)][d(2)];
                        for c in 0..6 {
                            own[c] += wp * wq * cell[c];
                        }
                    }
                }
                let norm = (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]).sqrt();
                let u = [r[0] / norm, r[1] / norm, r[2] / norm];
                // u_a u_b Ψ_ab over all (a, b), the off-diagonal components twice.
                let mut uu = 0.0;
                for (c, &(a, b)) in SYM.iter().enumerate() {
                    let twice = if a == b { 1.0 } else { 2.0 };
                    uu += twice * u[a] * u[b] * own[c];
                }
                for i in 0..3 {
                    for j in 0..3 {
                        s[3 * i + j] += w[i] * w[j] * (psi0 - uu);
                    }
                }
            }
            s
        })
        .collect();
    for p in &corrections {
        for (t, v) in sums.iter_mut().zip(p) {
            *t += v;
        }
    }

    let mut r = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            // Symmetrise (the two triangles differ by rounding only).
            r[i][j] = scale * 0.5 * (sums[3 * i + j] + sums[3 * j + i]);
        }
    }
    (r, spacing)
}

/// In-place 3-D FFT of a cube of side `m` (element (x, y, z) at (x·m + y)·m + z) in the
/// direction of the 1-D plan `fft` (forward or inverse, unnormalised): each pass transforms
/// the contiguous axis and rotates the layout (x, y, z) → (y, z, x), so that after three
/// passes every axis is transformed and the layout is the original.
pub(crate) fn fft3(data: &mut [Complex<f64>], m: usize, fft: &dyn Fft<f64>) {
    let mut other = vec![Complex::new(0.0, 0.0); data.len()];
    for _ in 0..3 {
        data.par_chunks_mut(m * m)
            .for_each(|slab| fft.process(slab));
        // other[(y·m + z)·m + x] = data[(x·m + y)·m + z]
        let src: &[Complex<f64>] = data;
        other
            .par_chunks_mut(m * m)
            .enumerate()
            .for_each(|(y, slab)| {
                for z in 0..m {
                    for x in 0..m {
                        slab[z * m + x] = src[(x * m + y) * m + z];
                    }
                }
            });
        data.copy_from_slice(&other);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The rotating 3-D FFT equals a direct DFT on a small cube.
    #[test]
    fn fft3_matches_direct_dft() {
        let m = 6;
        let data: Vec<Complex<f64>> = (0..m * m * m)
            .map(|i| Complex::new((0.37 * i as f64).sin(), (0.11 * i as f64).cos()))
            .collect();
        let mut got = data.clone();
        let fft = FftPlanner::<f64>::new().plan_fft_forward(m);
        fft3(&mut got, m, fft.as_ref());
        for kx in 0..m {
            for ky in 0..m {
                for kz in 0..m {
                    let mut s = Complex::new(0.0, 0.0);
                    for x in 0..m {
                        for y in 0..m {
                            for z in 0..m {
                                let ph = -2.0 * PI * ((kx * x + ky * y + kz * z) as f64) / m as f64;
                                s += data[(x * m + y) * m + z] * Complex::new(ph.cos(), ph.sin());
                            }
                        }
                    }
                    let g = got[(kx * m + ky) * m + kz];
                    assert!((g - s).norm() < 1e-10, "{kx} {ky} {kz}: {g} vs {s}");
                }
            }
        }
    }
}
