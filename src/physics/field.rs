//! Peculiar-velocity fields in observer-centred Cartesian coordinates: gridded fields with
//! trilinear interpolation, linear-theory velocities from a gridded density contrast
//! (FFT, periodic or with δ = 0 outside the grid), analytic models (a uniform bulk flow plus spherical linear infall onto
//! named centres), and a combined flow model (β scaling, an external bulk flow V_ext and a
//! velocity dispersion σ_v).
//!
//! # Conventions
//!
//! * Positions are comoving, in the field's [`LengthUnit`] (Mpc or h⁻¹ Mpc), on the
//!   Cartesian axes named by [`FieldAxes`], with the observer at (0, 0, 0): a galaxy at
//!   distance d in direction n̂ sits at d·n̂ (see
//!   [`Direction::at_distance`](crate::physics::sky::Direction::at_distance)).
//! * Velocities are peculiar velocities at the present epoch (a = 1, z = 0), km/s, with
//!   components along the same axes.
//! * Grids are stored with x varying fastest: the value of cell (i, j, k) is element
//!   `i + n_x·(j + n_y·k)` ([`VelocityGrid::index`]), the order of a FITS image with
//!   NAXIS1 = n_x.
//!
//! Everything here is a pure function over numbers; reading and writing field files lives in
//! `crate::catalogue::field_io`.

use std::fmt;
use std::str::FromStr;

use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use thiserror::Error;

use super::cosmology::{CosmologyParams, LengthUnit};
use super::sky::SkyRotations;

/// Rounding allowance, in cells, at the faces of a grid (see [`VelocityGrid::contains`]).
pub const FACE_TOLERANCE_CELLS: f64 = 1e-9;

/// Cartesian axes of a field.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum FieldAxes {
    /// Supergalactic SGX, SGY, SGZ: x towards (SGL, SGB) = (0°, 0°), y towards (90°, 0°),
    /// z towards the supergalactic north pole (de Vaucouleurs et al. 1991, RC3; the frame of
    /// [`crate::physics::sky::Supergalactic`]).
    #[default]
    Supergalactic,
    /// Galactic X, Y, Z: x towards (l, b) = (0°, 0°), y towards (90°, 0°), z towards the
    /// north Galactic pole (the frame of [`crate::physics::sky::Galactic`]).
    Galactic,
}

impl FieldAxes {
    /// Lower-case name, as used in messages and settings.
    pub fn name(self) -> &'static str {
        match self {
            FieldAxes::Supergalactic => "supergalactic",
            FieldAxes::Galactic => "galactic",
        }
    }

    /// A Galactic Cartesian vector (position or velocity) expressed on these axes.
    pub fn from_galactic(self, rotations: &SkyRotations, v: [f64; 3]) -> [f64; 3] {
        match self {
            FieldAxes::Galactic => v,
            FieldAxes::Supergalactic => rotations.galactic_to_supergalactic.apply_vector(v),
        }
    }

    /// A vector on these axes expressed on Galactic axes (inverse of
    /// [`FieldAxes::from_galactic`]).
    pub fn to_galactic(self, rotations: &SkyRotations, v: [f64; 3]) -> [f64; 3] {
        match self {
            FieldAxes::Galactic => v,
            FieldAxes::Supergalactic => rotations
                .galactic_to_supergalactic
                .inverse()
                .apply_vector(v),
        }
    }
}

impl fmt::Display for FieldAxes {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for FieldAxes {
    type Err = String;
    /// `supergalactic`/`sg` or `galactic`/`gal`, any case.
    fn from_str(s: &str) -> Result<Self, String> {
        match s.trim().to_ascii_lowercase().as_str() {
            "supergalactic" | "sg" => Ok(FieldAxes::Supergalactic),
            "galactic" | "gal" => Ok(FieldAxes::Galactic),
            _ => Err(format!(
                "unknown field axes '{s}': use 'supergalactic' or 'galactic'"
            )),
        }
    }
}

/// The Hubble constant in km/s per field length unit: H0 for Mpc, 100 for h⁻¹ Mpc
/// (a length L in h⁻¹ Mpc is L/h Mpc, so H0·L/h = 100·L km/s).
pub fn hubble_per_length(params: &CosmologyParams, unit: LengthUnit) -> f64 {
    params.h0 / unit.from_mpc_factor(params)
}

/// What can be wrong with a field or a flow model.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum FieldError {
    #[error("{quantity} must be positive and finite, got {value}")]
    NotPositive { quantity: &'static str, value: f64 },
    #[error("{quantity} is not a finite number ({value})")]
    NotFinite { quantity: &'static str, value: f64 },
    #[error("grid shape {shape:?} is not usable: every axis needs at least one cell and the total must fit in memory")]
    BadShape { shape: [usize; 3] },
    #[error("velocity component {component} has {found} values but a {shape:?} grid has {expected} cells")]
    WrongLength {
        component: char,
        found: usize,
        expected: usize,
        shape: [usize; 3],
    },
    #[error("velocity component {component} is not finite ({value}) in cell ({i}, {j}, {k})")]
    NotFiniteVelocity {
        component: char,
        value: f64,
        i: usize,
        j: usize,
        k: usize,
    },
    #[error("the grid is on {grid_axes} axes in {grid_unit} but the analytic model on {analytic_axes} axes in {analytic_unit}")]
    Mismatch {
        grid_axes: FieldAxes,
        grid_unit: &'static str,
        analytic_axes: FieldAxes,
        analytic_unit: &'static str,
    },
}

fn positive(quantity: &'static str, value: f64) -> Result<(), FieldError> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(FieldError::NotPositive { quantity, value })
    }
}

fn finite(quantity: &'static str, value: f64) -> Result<(), FieldError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(FieldError::NotFinite { quantity, value })
    }
}

/// Number of cells of a shape, if every axis is non-empty and the product fits.
fn cell_count(shape: [usize; 3]) -> Result<usize, FieldError> {
    if shape.contains(&0) {
        return Err(FieldError::BadShape { shape });
    }
    shape[0]
        .checked_mul(shape[1])
        .and_then(|n| n.checked_mul(shape[2]))
        .filter(|&n| n <= isize::MAX as usize / 8)
        .ok_or(FieldError::BadShape { shape })
}

const COMPONENTS: [char; 3] = ['x', 'y', 'z'];

// ---------------------------------------------------------------------------------------------
// Gridded fields
// ---------------------------------------------------------------------------------------------

/// A velocity field sampled at the centres of cubic cells.
///
/// Cell (i, j, k) has its centre at `origin + spacing·(i, j, k)`; its velocity is element
/// [`VelocityGrid::index`]`(i, j, k)` = `i + n_x·(j + n_y·k)` (x fastest) of each `v[c]`.
#[derive(Debug, Clone, PartialEq)]
pub struct VelocityGrid {
    /// Centre of cell (0, 0, 0), in `length_unit`.
    pub origin: [f64; 3],
    /// Distance between neighbouring cell centres (the cell size), in `length_unit`.
    pub spacing: f64,
    /// Cells along x, y, z.
    pub shape: [usize; 3],
    pub axes: FieldAxes,
    pub length_unit: LengthUnit,
    /// Velocity components along x, y, z, km/s, x fastest.
    pub v: [Vec<f64>; 3],
}

impl VelocityGrid {
    /// A checked grid (see [`VelocityGrid::check`]).
    pub fn new(
        origin: [f64; 3],
        spacing: f64,
        shape: [usize; 3],
        axes: FieldAxes,
        length_unit: LengthUnit,
        v: [Vec<f64>; 3],
    ) -> Result<Self, FieldError> {
        let grid = VelocityGrid {
            origin,
            spacing,
            shape,
            axes,
            length_unit,
            v,
        };
        grid.check()?;
        Ok(grid)
    }

    /// Geometry and sizes: finite origin, positive finite spacing, non-empty shape, each
    /// component holding exactly one value per cell. Values themselves are not inspected
    /// ([`VelocityGrid::check_values`] does that).
    pub fn check(&self) -> Result<(), FieldError> {
        for (a, &o) in self.origin.iter().enumerate() {
            finite(["origin x", "origin y", "origin z"][a], o)?;
        }
        positive("grid spacing", self.spacing)?;
        let n = cell_count(self.shape)?;
        for (c, comp) in self.v.iter().enumerate() {
            if comp.len() != n {
                return Err(FieldError::WrongLength {
                    component: COMPONENTS[c],
                    found: comp.len(),
                    expected: n,
                    shape: self.shape,
                });
            }
        }
        Ok(())
    }

    /// Every velocity value finite; the first that is not is named by component and cell.
    pub fn check_values(&self) -> Result<(), FieldError> {
        for (c, comp) in self.v.iter().enumerate() {
            if let Some(idx) = comp.iter().position(|x| !x.is_finite()) {
                let [i, j, k] = self.cell_of(idx);
                return Err(FieldError::NotFiniteVelocity {
                    component: COMPONENTS[c],
                    value: comp[idx],
                    i,
                    j,
                    k,
                });
            }
        }
        Ok(())
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.shape[0] * self.shape[1] * self.shape[2]
    }

    /// Whether the grid has no cells (never true for a checked grid).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Storage index of cell (i, j, k): `i + n_x·(j + n_y·k)`.
    pub fn index(&self, i: usize, j: usize, k: usize) -> usize {
        i + self.shape[0] * (j + self.shape[1] * k)
    }

    /// Cell (i, j, k) of a storage index (inverse of [`VelocityGrid::index`]).
    pub fn cell_of(&self, index: usize) -> [usize; 3] {
        let [nx, ny, _] = self.shape;
        [index % nx, (index / nx) % ny, index / (nx * ny)]
    }

    /// Centre of cell (i, j, k).
    pub fn cell_centre(&self, i: usize, j: usize, k: usize) -> [f64; 3] {
        let h = self.spacing;
        [
            self.origin[0] + h * i as f64,
            self.origin[1] + h * j as f64,
            self.origin[2] + h * k as f64,
        ]
    }

    /// Lowest and highest cell-centre coordinates along each axis: the box of
    /// [`VelocityGrid::contains`].
    pub fn bounds(&self) -> ([f64; 3], [f64; 3]) {
        let mut hi = self.origin;
        for (a, h) in hi.iter_mut().enumerate() {
            *h += self.spacing * (self.shape[a] - 1) as f64;
        }
        (self.origin, hi)
    }

    /// Fractional cell coordinates of `p`, or `None` outside the lattice.
    fn lattice_coordinates(&self, p: [f64; 3]) -> Option<[f64; 3]> {
        let mut u = [0.0; 3];
        for a in 0..3 {
            let last = (self.shape[a] - 1) as f64;
            let t = (p[a] - self.origin[a]) / self.spacing;
            // NaN fails both comparisons.
            if !(t >= -FACE_TOLERANCE_CELLS && t <= last + FACE_TOLERANCE_CELLS) {
                return None;
            }
            u[a] = t.clamp(0.0, last);
        }
        Some(u)
    }

    /// Whether `p` lies inside the cell-centre lattice: on every axis a,
    /// `origin[a] ≤ p[a] ≤ origin[a] + (shape[a] − 1)·spacing` (a closed box through the
    /// outermost cell centres, not the outer cell faces), with an allowance of
    /// [`FACE_TOLERANCE_CELLS`] cells for rounding. Along an axis with a single cell only
    /// that plane is inside. A non-finite coordinate is outside.
    pub fn contains(&self, p: [f64; 3]) -> bool {
        self.lattice_coordinates(p).is_some()
    }

    /// Velocity at `p` by trilinear interpolation between the eight surrounding cell
    /// centres, or `None` outside the lattice ([`VelocityGrid::contains`]).
    ///
    /// Source: Press, Teukolsky, Vetterling & Flannery (2007), *Numerical Recipes*, 3rd ed.,
    /// §3.6 (bilinear interpolation, eq. 3.6.5), applied along the third axis as well: with
    /// fractional offsets (t, u, w) ∈ [0, 1]³ inside the cell, the value is
    /// Σ over corners c of f_c·Π_a (t_a if c_a = 1 else 1 − t_a). It is exact for fields
    /// linear in each coordinate and continuous across cells. A point within the tolerance
    /// outside a face is moved onto it.
    ///
    /// Panics if the grid fails [`VelocityGrid::check`] (component lengths).
    pub fn velocity_at(&self, p: [f64; 3]) -> Option<[f64; 3]> {
        let u = self.lattice_coordinates(p)?;
        let mut base = [0usize; 3];
        let mut t = [0.0; 3];
        for a in 0..3 {
            let n = self.shape[a];
            if n > 1 {
                let i = (u[a].floor() as usize).min(n - 2);
                base[a] = i;
                t[a] = u[a] - i as f64;
            }
        }
        let mut out = [0.0; 3];
        for corner in 0..8usize {
            let d = [corner & 1, (corner >> 1) & 1, (corner >> 2) & 1];
            let mut w = 1.0;
            for a in 0..3 {
                w *= if d[a] == 1 { t[a] } else { 1.0 - t[a] };
            }
            // Also skips the missing upper corner along a single-cell axis (t = 0 there).
            if w == 0.0 {
                continue;
            }
            let idx = self.index(base[0] + d[0], base[1] + d[1], base[2] + d[2]);
            for (c, o) in out.iter_mut().enumerate() {
                *o += w * self.v[c][idx];
            }
        }
        Some(out)
    }
}

// ---------------------------------------------------------------------------------------------
// Linear theory on a periodic grid
// ---------------------------------------------------------------------------------------------

/// Linear-theory peculiar velocity at z = 0 of a gridded density contrast δ on a periodic
/// box, by FFT.
///
/// `delta` holds δ at the cell centres x_j = x_0 + h·j, j_a = 0 … N_a − 1, x fastest
/// (element `j_x + N_x·(j_y + N_y·j_z)`), `shape` = (N_x, N_y, N_z), `spacing` = h in the
/// length unit L, `growth_rate` = f = d ln D / d ln a, `h0_km_s_per_length` = H0 in km/s per
/// L (see [`hubble_per_length`]). The box is taken as periodic with sides N_a·h. Returns
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
///   [`FlowModel::external`]).
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

// ---------------------------------------------------------------------------------------------
// Analytic models
// ---------------------------------------------------------------------------------------------

/// A spherically symmetric overdensity that galaxies fall towards in linear theory.
///
/// Mean overdensity inside radius r (the profile adopted here):
///
/// Δ(<r) = δ0 / (1 + (r/r_s)²),
///
/// flat (Δ → δ0) in the core and falling as r⁻² outside. The local overdensity that
/// matches it, δ(r) = (3r²)⁻¹ d(r³Δ)/dr, is δ0 (1 + x²/3)/(1 + x²)² with x = r/r_s; the
/// excess mass inside r grows ∝ r at large r. Linear theory wants |Δ| ≪ 1.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InfallCentre {
    /// A label for messages and outputs (e.g. "knot").
    pub name: String,
    /// Centre, in the model's length unit and axes.
    pub position: [f64; 3],
    /// Mean overdensity in the core, Δ(<0).
    pub delta0: f64,
    /// Core radius r_s, in the model's length unit.
    pub r_scale: f64,
}

impl InfallCentre {
    /// Δ(<r), the mean overdensity inside radius r.
    pub fn mean_overdensity(&self, r: f64) -> f64 {
        let x = r / self.r_scale;
        self.delta0 / (1.0 + x * x)
    }

    /// δ(r), the local overdensity at radius r implied by [`InfallCentre::mean_overdensity`].
    pub fn local_overdensity(&self, r: f64) -> f64 {
        let x2 = (r / self.r_scale).powi(2);
        self.delta0 * (1.0 + x2 / 3.0) / (1.0 + x2).powi(2)
    }

    /// Linear-theory infall velocity at `p`, km/s:
    ///
    /// **v = −(1/3) H0 f Δ(<r) r r̂**, r = |p − centre|, r̂ the unit vector from the centre
    /// to p (towards the centre for Δ > 0).
    ///
    /// Source: Peebles (1976), ApJ 205, 318, "The peculiar velocity field in the Local
    /// Supercluster"; Peebles (1980), *The Large-Scale Structure of the Universe*, §14. It
    /// is the integral form of ∇·v = −H0 f δ for a spherical perturbation (Gauss's theorem
    /// over the sphere of radius r). With the profile above, r r̂ = p − centre and
    /// v = −(1/3) H0 f δ0 (p − centre)/(1 + r²/r_s²): smooth everywhere and zero at the
    /// centre.
    pub fn velocity_at(&self, p: [f64; 3], h0_km_s_per_length: f64, growth_rate: f64) -> [f64; 3] {
        let d = [
            p[0] - self.position[0],
            p[1] - self.position[1],
            p[2] - self.position[2],
        ];
        let r = (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt();
        let s = -h0_km_s_per_length * growth_rate * self.mean_overdensity(r) / 3.0;
        [s * d[0], s * d[1], s * d[2]]
    }

    fn check(&self) -> Result<(), FieldError> {
        for &x in &self.position {
            finite("infall centre position", x)?;
        }
        finite("infall centre delta0", self.delta0)?;
        positive("infall centre r_scale", self.r_scale)
    }
}

/// An analytic velocity field: a uniform bulk flow plus linear infall onto any number of
/// centres, v(p) = bulk + Σ_centres v_c(p).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AnalyticField {
    /// Uniform flow, km/s, on `axes`.
    pub bulk: [f64; 3],
    pub centres: Vec<InfallCentre>,
    /// Linear growth rate f = d ln D / d ln a at z = 0 (≈ Ω_m^0.55 in ΛCDM).
    pub growth_rate: f64,
    /// H0 in km/s per `length_unit` ([`hubble_per_length`]).
    pub h0_km_s_per_length: f64,
    pub axes: FieldAxes,
    pub length_unit: LengthUnit,
}

impl AnalyticField {
    /// Finite bulk and growth rate, positive H0, well-formed centres.
    pub fn check(&self) -> Result<(), FieldError> {
        for &b in &self.bulk {
            finite("bulk flow", b)?;
        }
        finite("growth rate", self.growth_rate)?;
        positive("H0 per length unit", self.h0_km_s_per_length)?;
        self.centres.iter().try_for_each(InfallCentre::check)
    }

    /// Velocity at `p` (defined everywhere), km/s.
    pub fn velocity_at(&self, p: [f64; 3]) -> [f64; 3] {
        let mut v = self.bulk;
        for c in &self.centres {
            let u = c.velocity_at(p, self.h0_km_s_per_length, self.growth_rate);
            for a in 0..3 {
                v[a] += u[a];
            }
        }
        v
    }

    /// The model sampled at the cell centres of a grid with the given geometry, on the
    /// model's axes and length unit.
    pub fn sample(
        &self,
        origin: [f64; 3],
        spacing: f64,
        shape: [usize; 3],
    ) -> Result<VelocityGrid, FieldError> {
        self.check()?;
        let n = cell_count(shape)?;
        let mut grid = VelocityGrid {
            origin,
            spacing,
            shape,
            axes: self.axes,
            length_unit: self.length_unit,
            v: [vec![0.0; n], vec![0.0; n], vec![0.0; n]],
        };
        grid.check()?;
        for idx in 0..n {
            let [i, j, k] = grid.cell_of(idx);
            let v = self.velocity_at(grid.cell_centre(i, j, k));
            for (c, comp) in grid.v.iter_mut().enumerate() {
                comp[idx] = v[c];
            }
        }
        Ok(grid)
    }
}

// ---------------------------------------------------------------------------------------------
// Combined model
// ---------------------------------------------------------------------------------------------

/// A model of the peculiar-velocity field: optional gridded and analytic parts, scaled by β,
/// plus an external bulk flow, with a dispersion σ_v about the prediction.
///
/// v_model(p) = β · (v_grid(p) + v_analytic(p)) + V_ext.
///
/// β multiplies everything from the grid and the analytic part (the analytic bulk
/// included); V_ext does not scale. With linear bias, δ_galaxies = b δ, a grid computed from
/// the galaxy density contrast with f = 1 is turned into a velocity by β = f/b (Strauss &
/// Willick 1995, Phys. Rep. 261, 271). Grid and analytic part must share axes and length
/// unit ([`FlowModel::check`]).
#[derive(Debug, Clone, PartialEq)]
pub struct FlowModel {
    pub grid: Option<VelocityGrid>,
    pub analytic: Option<AnalyticField>,
    /// Scale of the grid and analytic velocities.
    pub beta: f64,
    /// V_ext, km/s, on the model's axes; added unscaled.
    pub external: [f64; 3],
    /// Dispersion of true velocities about the model (one component, km/s); carried for
    /// the caller's error budget, not used by [`FlowModel::velocity`].
    pub sigma_v: f64,
}

impl FlowModel {
    /// Consistency: each part valid, grid and analytic parts on the same axes and unit,
    /// finite β and V_ext, σ_v ≥ 0 and finite.
    pub fn check(&self) -> Result<(), FieldError> {
        if let Some(g) = &self.grid {
            g.check()?;
        }
        if let Some(a) = &self.analytic {
            a.check()?;
        }
        if let (Some(g), Some(a)) = (&self.grid, &self.analytic) {
            if g.axes != a.axes || g.length_unit != a.length_unit {
                return Err(FieldError::Mismatch {
                    grid_axes: g.axes,
                    grid_unit: g.length_unit.label(),
                    analytic_axes: a.axes,
                    analytic_unit: a.length_unit.label(),
                });
            }
        }
        finite("beta", self.beta)?;
        for &e in &self.external {
            finite("external flow", e)?;
        }
        if !(self.sigma_v.is_finite() && self.sigma_v >= 0.0) {
            return Err(FieldError::NotFinite {
                quantity: "sigma_v (must be finite and ≥ 0)",
                value: self.sigma_v,
            });
        }
        Ok(())
    }

    /// Axes of the positions and velocities: the grid's, else the analytic part's.
    pub fn axes(&self) -> Option<FieldAxes> {
        self.grid
            .as_ref()
            .map(|g| g.axes)
            .or(self.analytic.as_ref().map(|a| a.axes))
    }

    /// Length unit of positions: the grid's, else the analytic part's.
    pub fn length_unit(&self) -> Option<LengthUnit> {
        self.grid
            .as_ref()
            .map(|g| g.length_unit)
            .or(self.analytic.as_ref().map(|a| a.length_unit))
    }

    /// Model velocity at `p`, km/s: β (v_grid + v_analytic) + V_ext. `None` when there is a
    /// grid and `p` is outside it ([`VelocityGrid::contains`]); without a grid the model is
    /// defined everywhere (just V_ext when there is no analytic part either).
    pub fn velocity(&self, p: [f64; 3]) -> Option<[f64; 3]> {
        let mut v = match &self.grid {
            Some(g) => g.velocity_at(p)?,
            None => [0.0; 3],
        };
        if let Some(a) = &self.analytic {
            let u = a.velocity_at(p);
            for c in 0..3 {
                v[c] += u[c];
            }
        }
        for (vc, ext) in v.iter_mut().zip(self.external) {
            *vc = self.beta * *vc + ext;
        }
        Some(v)
    }

    /// Line-of-sight component of [`FlowModel::velocity`] for an observer at the origin,
    /// v·p/|p|, km/s (positive = receding). `None` outside the grid or at p = 0.
    pub fn radial_velocity(&self, p: [f64; 3]) -> Option<f64> {
        let r = (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt();
        if !(r.is_finite() && r > 0.0) {
            return None;
        }
        let v = self.velocity(p)?;
        Some((v[0] * p[0] + v[1] * p[1] + v[2] * p[2]) / r)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn constant_grid(shape: [usize; 3], v: [f64; 3]) -> VelocityGrid {
        let n = shape[0] * shape[1] * shape[2];
        VelocityGrid::new(
            [1.0, 2.0, 3.0],
            0.5,
            shape,
            FieldAxes::Supergalactic,
            LengthUnit::Mpc,
            [vec![v[0]; n], vec![v[1]; n], vec![v[2]; n]],
        )
        .unwrap()
    }

    #[test]
    fn field_single_cell_axes_are_planes() {
        let g = constant_grid([3, 1, 2], [1.0, -2.0, 4.0]);
        assert_eq!(g.velocity_at([1.7, 2.0, 3.2]), Some([1.0, -2.0, 4.0]));
        assert!(!g.contains([1.7, 2.01, 3.2]));
        assert_eq!(g.velocity_at([1.7, 1.99, 3.2]), None);
    }

    #[test]
    fn field_faces_allow_rounding_only() {
        let g = constant_grid([4, 4, 4], [0.0; 3]);
        let (_, hi) = g.bounds();
        assert!(g.contains([hi[0] + 1e-12, 2.0, 3.0]));
        assert!(!g.contains([hi[0] + 1e-6, 2.0, 3.0]));
        assert!(g.contains([1.0 - 1e-12, 2.0, 3.0]));
        assert!(!g.contains([1.0 - 1e-6, 2.0, 3.0]));
    }

    #[test]
    fn field_hubble_per_length_unit() {
        let p = CosmologyParams::flat_lcdm(70.0, 0.3);
        assert_eq!(hubble_per_length(&p, LengthUnit::Mpc), 70.0);
        assert!((hubble_per_length(&p, LengthUnit::MpcOverH) - 100.0).abs() < 1e-12);
    }

    #[test]
    fn field_axes_conversions_invert() {
        let rot = SkyRotations::default();
        let v = [120.0, -45.0, 300.0];
        for axes in [FieldAxes::Supergalactic, FieldAxes::Galactic] {
            let back = axes.to_galactic(&rot, axes.from_galactic(&rot, v));
            for c in 0..3 {
                assert!((back[c] - v[c]).abs() < 1e-10);
            }
            assert_eq!(axes.name().parse::<FieldAxes>().unwrap(), axes);
        }
        assert!("equatorial".parse::<FieldAxes>().is_err());
    }

    #[test]
    fn field_analytic_sample_matches_model_at_centres() {
        let model = AnalyticField {
            bulk: [10.0, 0.0, -5.0],
            centres: vec![InfallCentre {
                name: "c".into(),
                position: [0.0; 3],
                delta0: 1.0,
                r_scale: 5.0,
            }],
            growth_rate: 0.5,
            h0_km_s_per_length: 100.0,
            axes: FieldAxes::Galactic,
            length_unit: LengthUnit::MpcOverH,
        };
        let g = model.sample([-4.0; 3], 2.0, [5, 5, 5]).unwrap();
        assert_eq!(g.axes, FieldAxes::Galactic);
        let p = g.cell_centre(4, 1, 3);
        assert_eq!(g.velocity_at(p).unwrap(), model.velocity_at(p));
        let mut bad = model.clone();
        bad.centres[0].r_scale = 0.0;
        assert!(bad.sample([0.0; 3], 1.0, [2, 2, 2]).is_err());
    }
}
