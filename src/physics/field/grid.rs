//! Gridded velocity fields: a velocity per cubic cell, cell indexing, bounds, and trilinear
//! interpolation.

use super::{cell_count, finite, positive, FieldAxes, FieldError, COMPONENTS};
use crate::physics::cosmology::LengthUnit;

/// Rounding allowance, in cells, at the faces of a grid (see [`VelocityGrid::contains`]).
pub const FACE_TOLERANCE_CELLS: f64 = 1e-9;

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
}
