//! Linear-theory velocities from a gridded density contrast: the periodic FFT solver and the
//! isolated (zero-padded) one, with the grid checks and axis transforms they share.

use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::cell_count;

/// Linear-theory peculiar velocity at z = 0 of a gridded density contrast δ on a periodic
/// box, by FFT.
///
/// `delta` holds δ at the cell centres x_j = x_0 + h·j, j_a = 0 … N_a − 1, x fastest
/// (element `j_x + N_x·(j_y + N_y·j_z)`), `shape` = (N_x, N_y, N_z), `spacing` = h in the
/// length unit L, `growth_rate` = f = d ln D / d ln a, `h0_km_s_per_length` = H0 in km/s per
/// L (see [`hubble_per_length`](super::hubble_per_length)). The box is taken as periodic with sides N_a·h. Returns
/// (v_x, v_y, v_z) in km/s at the same cell centres, same order. x_0 does not enter.
///
/// # Physics
///
/// Linear continuity for the peculiar velocity v (comoving coordinates x):
/// ∂δ/∂t + a⁻¹ ∇·v = 0, and growing-mode δ ∝ D(t) gives ∂δ/∂t = H f δ, so
/// **∇·v = −a H f δ**, with v irrotational in the growing mode (Peebles 1980,
/// *The Large-Scale Structure of the Universe*, §14; Strauss & Willick 1995, Phys. Rep.
/// 261, 271). At a = 1, aH = H0.
///
/// # Sign for this transform convention
///
/// rustfft's forward transform is δ̂_m = Σ_j δ_j exp(−2πi Σ_a m_a j_a / N_a) and its
/// inverse carries exp(+2πi …), unnormalised; so δ(x) = N⁻¹ Σ_m δ̂_m exp(+i k·(x − x_0)),
/// N = N_x N_y N_z, with k_a = 2π m̃_a / (N_a h) and m̃_a the signed index (m_a for
/// m_a < N_a/2, m_a − N_a above). An irrotational v has v̂_m = α_m k; then
/// (∇·v)^_m = i k·v̂_m = i α_m k², and continuity asks i α_m k² = −H0 f δ̂_m, i.e.
/// α_m = i H0 f δ̂_m / k²:
///
/// **v̂_m = +i H0 f δ̂_m k / k²**, then v = inverse transform / N.
///
/// Check on one mode: δ = A cos(k·x) gives v = −(H0 f A / k²) k sin(k·x), which points
/// back towards the crest at x = 0 from either side (infall onto the overdensity), and
/// ∇·v = −H0 f A cos(k·x) = −H0 f δ.
///
/// # Special modes
///
/// * k = 0: the mean of δ drives no flow in a periodic box (and fixes no bulk motion of the
///   box); v̂_0 = 0, so v has zero mean. Add a bulk flow separately (e.g.
///   [`FlowModel::external`](super::FlowModel::external)).
/// * Nyquist planes: for an even N_a the plane m_a = N_a/2 holds the modes in cos(π j_a),
///   whose derivative is not represented on the grid (the matching sine vanishes at every
///   node); keeping i k_a there would make v complex. All three components of v̂ are set to
///   zero on every such plane. So v is the exact linear-theory velocity of δ with its mean
///   and its Nyquist planes removed. (Odd N_a have no Nyquist plane.)
///
/// # Panics
///
/// If `delta.len()` differs from N_x N_y N_z, an axis is empty, or `spacing` is not positive
/// and finite.
pub fn velocity_from_density(
    delta: &[f64],
    shape: [usize; 3],
    spacing: f64,
    growth_rate: f64,
    h0_km_s_per_length: f64,
) -> [Vec<f64>; 3] {
    let n = check_density_grid("velocity_from_density", delta, shape, spacing);

    let mut planner = FftPlanner::<f64>::new();
    let forward: Vec<_> = shape.iter().map(|&m| planner.plan_fft_forward(m)).collect();
    let inverse: Vec<_> = shape.iter().map(|&m| planner.plan_fft_inverse(m)).collect();

    let mut dhat: Vec<Complex<f64>> = delta.iter().map(|&d| Complex::new(d, 0.0)).collect();
    for (a, fft) in forward.iter().enumerate() {
        fft_along_axis(&mut dhat, shape, a, fft.as_ref());
    }

    // Signed wavenumbers per axis; None on a Nyquist plane.
    let wavenumbers: Vec<Vec<Option<f64>>> = (0..3)
        .map(|a| {
            let na = shape[a];
            let length = na as f64 * spacing;
            (0..na)
                .map(|m| {
                    if na.is_multiple_of(2) && m == na / 2 {
                        None
                    } else {
                        let signed = if m <= na / 2 {
                            m as f64
                        } else {
                            m as f64 - na as f64
                        };
                        Some(2.0 * std::f64::consts::PI * signed / length)
                    }
                })
                .collect()
        })
        .collect();

    let amplitude = h0_km_s_per_length * growth_rate;
    let mut out: [Vec<f64>; 3] = [Vec::new(), Vec::new(), Vec::new()];
    for (c, component) in out.iter_mut().enumerate() {
        let mut vhat = vec![Complex::new(0.0, 0.0); n];
        for mz in 0..shape[2] {
            for my in 0..shape[1] {
                for mx in 0..shape[0] {
                    let (Some(kx), Some(ky), Some(kz)) =
                        (wavenumbers[0][mx], wavenumbers[1][my], wavenumbers[2][mz])
                    else {
                        continue;
                    };
                    let k2 = kx * kx + ky * ky + kz * kz;
                    if k2 == 0.0 {
                        continue;
                    }
                    let kc = [kx, ky, kz][c];
                    let idx = mx + shape[0] * (my + shape[1] * mz);
                    // i · amplitude · k_c / k² · δ̂
                    vhat[idx] = Complex::new(0.0, amplitude * kc / k2) * dhat[idx];
                }
            }
        }
        for (a, fft) in inverse.iter().enumerate() {
            fft_along_axis(&mut vhat, shape, a, fft.as_ref());
        }
        let norm = 1.0 / n as f64;
        *component = vhat.iter().map(|z| z.re * norm).collect();
    }
    out
}

/// How the density outside a gridded δ is taken when velocities are derived from it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum DensityBoundary {
    /// δ = 0 (the mean density) outside the grid: [`velocity_from_density_isolated`]. For a
    /// grid reconstructed from a survey around the observer.
    #[default]
    Isolated,
    /// The grid is one cell of a periodic universe: [`velocity_from_density`]. For a
    /// simulation box.
    Periodic,
}

impl DensityBoundary {
    pub fn name(self) -> &'static str {
        match self {
            DensityBoundary::Isolated => "isolated",
            DensityBoundary::Periodic => "periodic",
        }
    }
}

/// Linear-theory peculiar velocity at z = 0 of a gridded density contrast δ with **δ = 0
/// outside the grid** (isolated boundary), by zero-padded FFT convolution.
///
/// Arguments, layout and units as in [`velocity_from_density`]; the box is not periodic.
///
/// # Physics
///
/// The growing-mode solution of ∇·v = −a H f δ that vanishes far from the matter is the
/// integral over the density (Peebles 1980, *The Large-Scale Structure of the Universe*,
/// §14, the linear-theory velocity–gravity relation; the form below is its Green's
/// function, from memory of the text and checked here by its divergence):
///
/// **v(x) = (H0 f / 4π) ∫ δ(x′) (x′ − x)/|x′ − x|³ d³x′**, at a = 1.
///
/// (∇ₓ·[(x′ − x)/|x′ − x|³] = −4π δ_D(x − x′), so ∇·v = −H0 f δ; v points towards
/// overdensities.) On the grid the integral becomes the sum over cells
/// v_i = (H0 f h³/4π) Σ_{j≠i} δ_j (x_j − x_i)/|x_j − x_i|³, the cell's own term being zero
/// by symmetry.
///
/// # Method
///
/// The sum is a convolution with the odd kernel K(r) = r/|r|³; it is evaluated exactly by
/// FFT on a grid doubled along each axis, δ zero-padded and K laid out with wrapped
/// offsets, so that no periodic image reaches the original cells (Hockney & Eastwood 1988,
/// *Computer Simulation Using Particles*, §6-5-4, "isolated systems" — from memory). The
/// result equals the direct sum to rounding (tested). Unlike [`velocity_from_density`] the
/// mean of δ over the grid drives a flow: an overdense grid falls in on itself, as a
/// region denser than its surroundings would.
///
/// Cost: seven FFTs of 8 N_x N_y N_z points; memory two complex arrays of that size (16
/// bytes per padded point each) and the three output components.
///
/// # Panics
///
/// As [`velocity_from_density`].
pub fn velocity_from_density_isolated(
    delta: &[f64],
    shape: [usize; 3],
    spacing: f64,
    growth_rate: f64,
    h0_km_s_per_length: f64,
) -> [Vec<f64>; 3] {
    let n = check_density_grid("velocity_from_density_isolated", delta, shape, spacing);
    // A doubled axis of length 2N_a holds offsets −(N_a − 1) … N_a − 1 without overlap. An
    // axis of one cell stays one cell (offsets are all zero along it).
    let padded: [usize; 3] = shape.map(|m| if m == 1 { 1 } else { 2 * m });
    let np = cell_count(padded).expect("velocity_from_density_isolated: padded grid too large");
    let pidx = |i: usize, j: usize, k: usize| i + padded[0] * (j + padded[1] * k);

    let mut planner = FftPlanner::<f64>::new();
    let forward: Vec<_> = padded
        .iter()
        .map(|&m| planner.plan_fft_forward(m))
        .collect();
    let inverse: Vec<_> = padded
        .iter()
        .map(|&m| planner.plan_fft_inverse(m))
        .collect();
    let transform = |data: &mut [Complex<f64>], plans: &[std::sync::Arc<dyn Fft<f64>>]| {
        for (a, fft) in plans.iter().enumerate() {
            fft_along_axis(data, padded, a, fft.as_ref());
        }
    };

    let mut dhat = vec![Complex::new(0.0, 0.0); np];
    for k in 0..shape[2] {
        for j in 0..shape[1] {
            for i in 0..shape[0] {
                dhat[pidx(i, j, k)].re = delta[i + shape[0] * (j + shape[1] * k)];
            }
        }
    }
    transform(&mut dhat, &forward);

    // Wrapped offset, in cells, of padded index m along an axis of original length na:
    // 0 … na − 1 are themselves, na + 1 … 2na − 1 are negative; index na (offset ±na) is
    // never the difference of two original cells and holds zero.
    let offset = |m: usize, na: usize| -> Option<f64> {
        if m < na {
            Some(m as f64)
        } else if m > na {
            Some(m as f64 - 2.0 * na as f64)
        } else {
            None
        }
    };
    // v = −A (K ∗ δ): v_i = A Σ_j δ_j K(x_j − x_i) = −A Σ_j K(x_i − x_j) δ_j, K odd.
    let amplitude =
        h0_km_s_per_length * growth_rate * spacing.powi(3) / (4.0 * std::f64::consts::PI);
    let norm = 1.0 / np as f64;
    let mut out: [Vec<f64>; 3] = [Vec::new(), Vec::new(), Vec::new()];
    for (c, component) in out.iter_mut().enumerate() {
        let mut kernel = vec![Complex::new(0.0, 0.0); np];
        for k in 0..padded[2] {
            let Some(oz) = offset(k, shape[2]) else {
                continue;
            };
            for j in 0..padded[1] {
                let Some(oy) = offset(j, shape[1]) else {
                    continue;
                };
                for i in 0..padded[0] {
                    let Some(ox) = offset(i, shape[0]) else {
                        continue;
                    };
                    let r2 = ox * ox + oy * oy + oz * oz;
                    if r2 == 0.0 {
                        continue;
                    }
                    let rc = [ox, oy, oz][c] * spacing;
                    kernel[pidx(i, j, k)].re = rc / (r2 * spacing * spacing).powf(1.5);
                }
            }
        }
        transform(&mut kernel, &forward);
        for (kv, dv) in kernel.iter_mut().zip(&dhat) {
            *kv *= *dv;
        }
        transform(&mut kernel, &inverse);
        let mut values = Vec::with_capacity(n);
        for k in 0..shape[2] {
            for j in 0..shape[1] {
                for i in 0..shape[0] {
                    values.push(-amplitude * kernel[pidx(i, j, k)].re * norm);
                }
            }
        }
        *component = values;
    }
    out
}

/// The number of cells of a density grid, after the checks both solvers make.
///
/// # Panics
/// If `delta.len()` differs from N_x N_y N_z, an axis is empty, or `spacing` is not positive
/// and finite (`caller` names the solver).
fn check_density_grid(caller: &str, delta: &[f64], shape: [usize; 3], spacing: f64) -> usize {
    let n = cell_count(shape).unwrap_or_else(|_| panic!("{caller}: unusable grid shape"));
    assert_eq!(
        delta.len(),
        n,
        "{caller}: delta has {} values but shape {:?} has {} cells",
        delta.len(),
        shape,
        n
    );
    assert!(
        spacing.is_finite() && spacing > 0.0,
        "{caller}: spacing must be positive and finite, got {spacing}"
    );
    n
}

/// One-dimensional transforms along `axis` of an x-fastest 3-D array, all lines at once.
fn fft_along_axis(data: &mut [Complex<f64>], shape: [usize; 3], axis: usize, fft: &dyn Fft<f64>) {
    let n = shape[axis];
    if n == 1 {
        return;
    }
    let stride = match axis {
        0 => 1,
        1 => shape[0],
        _ => shape[0] * shape[1],
    };
    if stride == 1 {
        fft.process(data);
        return;
    }
    // Lines are gathered a bounded number at a time (memory: LINES_PER_PASS · n values,
    // not a copy of the whole array), transformed, and scattered back.
    const LINES_PER_PASS: usize = 4096;
    let total = data.len();
    let block = stride * n;
    let mut lines: Vec<Complex<f64>> = Vec::with_capacity(LINES_PER_PASS.min(stride) * n);
    for outer in (0..total).step_by(block) {
        for first in (0..stride).step_by(LINES_PER_PASS) {
            let last = (first + LINES_PER_PASS).min(stride);
            lines.clear();
            for inner in first..last {
                let base = outer + inner;
                lines.extend((0..n).map(|t| data[base + t * stride]));
            }
            fft.process(&mut lines);
            let mut it = lines.iter();
            for inner in first..last {
                let base = outer + inner;
                for t in 0..n {
                    data[base + t * stride] = *it.next().expect("as many values as gathered");
                }
            }
        }
    }
}
