//! The numbers of the flow map: redshift shells chosen from the data, error-weighted means of
//! η and of the first-order velocity η/κ in the equal-area sky cells of each shell, and the
//! dipole fitted to the cells.
//!
//! * Velocity from η: v = η/κ with κ = ∂η/∂v at z_cmb
//!   ([`eta_per_velocity`](crate::physics::dipole_likelihood::eta_per_velocity)); its error
//!   σ_η/κ is Gaussian because σ_η is, while v_pec from a log-normal distance error is skewed
//!   and its mean biased (the known bias of velocities from log-normal distances).
//! * Cell means: inverse-variance weighted means ([`super::binned::weighted_mean`]).
//! * Dipole: the weighted least-squares fit of u(n̂) = M + **D**·n̂ to the cell means (a
//!   monopole and a dipole, four linear parameters; normal equations as in Bevington &
//!   Robinson, "Data Reduction and Error Analysis", ch. 7, from memory), in the map's Cartesian
//!   axes (x → lon 0, y → lon 90°, z → the pole).
//!
//! Pure: no I/O.

use nalgebra::{Matrix4, Vector4};

use super::binned::weighted_mean;
use super::sky_cells::SkyGrid;

/// One object as the flow map uses it.
#[derive(Debug, Clone, Copy)]
pub struct MapObject {
    /// Position in the map's frame, degrees.
    pub lon: f64,
    pub lat: f64,
    /// Redshift distance D_C(z_cmb), Mpc: shells are made in it (not in the inferred
    /// distance, whose errors would sort objects by their own noise).
    pub depth: f64,
    pub eta: f64,
    pub eta_err: f64,
    /// κ = ∂η/∂v at z_cmb, s/km.
    pub kappa: f64,
}

/// A redshift shell: depth from `lo` to `hi` (Mpc), and the objects in it. Shell 0 is all
/// depths together.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shell {
    pub index: usize,
    pub lo: f64,
    pub hi: f64,
    pub n: usize,
}

/// The means in one cell of one shell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CellMean {
    pub shell: usize,
    pub cell: usize,
    /// Cell centre, degrees.
    pub lon: f64,
    pub lat: f64,
    pub n: usize,
    pub eta: f64,
    pub eta_err: f64,
    /// Weighted mean of η/κ, km/s.
    pub v: f64,
    pub v_err: f64,
}

/// A fitted monopole and dipole.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Dipole {
    pub monopole: f64,
    pub monopole_err: f64,
    /// Dipole vector, Cartesian axes of the map's frame, in the unit of the values.
    pub vector: [f64; 3],
    pub cov: [[f64; 3]; 3],
    pub amplitude: f64,
    pub amplitude_err: f64,
    /// Direction, degrees, in the map's frame.
    pub lon: f64,
    pub lat: f64,
    pub cells: usize,
}

/// How many shells a sample of `n` objects allows: 3 from 1500 objects, 2 from 600, else 1.
pub fn shell_count(n: usize) -> usize {
    if n >= 1500 {
        3
    } else if n >= 600 {
        2
    } else {
        1
    }
}

/// Shells of equal numbers of objects in depth, after shell 0 (all depths); a single shell is
/// shell 0 alone.
pub fn shells(objects: &[MapObject], count: usize) -> Vec<Shell> {
    let mut d: Vec<f64> = objects
        .iter()
        .map(|o| o.depth)
        .filter(|x| x.is_finite())
        .collect();
    d.sort_by(f64::total_cmp);
    if d.is_empty() {
        return Vec::new();
    }
    let mut out = vec![Shell {
        index: 0,
        lo: d[0],
        hi: d[d.len() - 1],
        n: d.len(),
    }];
    if count < 2 {
        return out;
    }
    let edge = |k: usize| d[((k * (d.len() - 1)) as f64 / count as f64).round() as usize];
    for k in 0..count {
        let (lo, hi) = (edge(k), edge(k + 1));
        let last = k + 1 == count;
        let n = d
            .iter()
            .filter(|&&x| x >= lo && (x < hi || (last && x <= hi)))
            .count();
        out.push(Shell {
            index: k + 1,
            lo,
            hi,
            n,
        });
    }
    out
}

fn in_shell(s: &Shell, shells: &[Shell], depth: f64) -> bool {
    let last = shells.last().is_some_and(|l| l.index == s.index);
    s.index == 0 || (depth >= s.lo && (depth < s.hi || (last && depth <= s.hi)))
}

/// The means of every cell of every shell (cells without objects included, with n = 0 and
/// NaN means), shell by shell, cells in grid order.
pub fn cell_means(objects: &[MapObject], grid: &SkyGrid, shells: &[Shell]) -> Vec<CellMean> {
    let mut out = Vec::with_capacity(grid.len() * shells.len());
    for s in shells {
        let mut eta: Vec<Vec<(f64, f64)>> = vec![Vec::new(); grid.len()];
        let mut vel: Vec<Vec<(f64, f64)>> = vec![Vec::new(); grid.len()];
        for o in objects {
            if !(o.depth.is_finite() && in_shell(s, shells, o.depth)) {
                continue;
            }
            let usable = o.eta.is_finite()
                && o.eta_err.is_finite()
                && o.eta_err > 0.0
                && o.kappa.is_finite()
                && o.kappa > 0.0;
            let Some(c) = grid.cell(o.lon, o.lat) else {
                continue;
            };
            if usable {
                eta[c].push((o.eta, o.eta_err));
                vel[c].push((o.eta / o.kappa, o.eta_err / o.kappa));
            }
        }
        for c in 0..grid.len() {
            let (lon, lat) = grid.centre(c).unwrap_or((f64::NAN, f64::NAN));
            let (e, ee, _) = weighted_mean(&eta[c]).unwrap_or((f64::NAN, f64::NAN, 0.0));
            let (v, ve, _) = weighted_mean(&vel[c]).unwrap_or((f64::NAN, f64::NAN, 0.0));
            out.push(CellMean {
                shell: s.index,
                cell: c,
                lon,
                lat,
                n: eta[c].len(),
                eta: e,
                eta_err: ee,
                v,
                v_err: ve,
            });
        }
    }
    out
}

/// Unit vector of (lon, lat) in degrees.
pub fn unit_vector(lon: f64, lat: f64) -> [f64; 3] {
    let (l, b) = (lon.to_radians(), lat.to_radians());
    [b.cos() * l.cos(), b.cos() * l.sin(), b.sin()]
}

/// The weighted fit of value = M + D·n̂ to (lon, lat, value, error) of cells; None with fewer
/// than 5 usable cells or a singular system (cells on too small a part of the sky).
pub fn fit_dipole(cells: &[(f64, f64, f64, f64)]) -> Option<Dipole> {
    let usable: Vec<&(f64, f64, f64, f64)> = cells
        .iter()
        .filter(|c| c.2.is_finite() && c.3.is_finite() && c.3 > 0.0)
        .collect();
    if usable.len() < 5 {
        return None;
    }
    let mut a = Matrix4::<f64>::zeros();
    let mut rhs = Vector4::<f64>::zeros();
    for c in &usable {
        let n = unit_vector(c.0, c.1);
        let f = Vector4::new(1.0, n[0], n[1], n[2]);
        let w = 1.0 / (c.3 * c.3);
        a += f * f.transpose() * w;
        rhs += f * (w * c.2);
    }
    let cov = a.try_inverse()?;
    let p = cov * rhs;
    let d = [p[1], p[2], p[3]];
    let amplitude = (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt();
    let mut c3 = [[0.0; 3]; 3];
    for (i, row) in c3.iter_mut().enumerate() {
        for (j, x) in row.iter_mut().enumerate() {
            *x = cov[(i + 1, j + 1)];
        }
    }
    // First-order error of |D|: (d̂ᵀ C d̂)^{1/2}.
    let amplitude_err = if amplitude > 0.0 {
        let u = [d[0] / amplitude, d[1] / amplitude, d[2] / amplitude];
        let mut s = 0.0;
        for i in 0..3 {
            for j in 0..3 {
                s += u[i] * c3[i][j] * u[j];
            }
        }
        s.max(0.0).sqrt()
    } else {
        f64::NAN
    };
    let lon = d[1].atan2(d[0]).to_degrees().rem_euclid(360.0);
    let lat = if amplitude > 0.0 {
        (d[2] / amplitude).clamp(-1.0, 1.0).asin().to_degrees()
    } else {
        f64::NAN
    };
    Some(Dipole {
        monopole: p[0],
        monopole_err: cov[(0, 0)].max(0.0).sqrt(),
        vector: d,
        cov: c3,
        amplitude,
        amplitude_err,
        lon,
        lat,
        cells: usable.len(),
    })
}

/// Angle between two directions, degrees.
pub fn separation_deg(a: (f64, f64), b: (f64, f64)) -> f64 {
    let (u, v) = (unit_vector(a.0, a.1), unit_vector(b.0, b.1));
    let dot = u[0] * v[0] + u[1] * v[1] + u[2] * v[2];
    dot.clamp(-1.0, 1.0).acos().to_degrees()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_exact_dipole_is_recovered() {
        let g = SkyGrid::with_zones(6);
        let truth = unit_vector(300.0, 20.0);
        let cells: Vec<(f64, f64, f64, f64)> = (0..g.len())
            .map(|i| {
                let (l, b) = g.centre(i).unwrap();
                let n = unit_vector(l, b);
                let v = 40.0 + 250.0 * (n[0] * truth[0] + n[1] * truth[1] + n[2] * truth[2]);
                (l, b, v, 10.0)
            })
            .collect();
        let d = fit_dipole(&cells).unwrap();
        assert!((d.amplitude - 250.0).abs() < 1e-6, "{d:?}");
        assert!((d.monopole - 40.0).abs() < 1e-6);
        assert!(separation_deg((d.lon, d.lat), (300.0, 20.0)) < 1e-6);
    }

    #[test]
    fn shells_split_the_sample_evenly() {
        let objs: Vec<MapObject> = (0..300)
            .map(|i| MapObject {
                lon: 0.0,
                lat: 0.0,
                depth: i as f64,
                eta: 0.0,
                eta_err: 0.1,
                kappa: 1e-5,
            })
            .collect();
        let s = shells(&objs, 3);
        assert_eq!(s.len(), 4);
        assert_eq!(s[0].n, 300);
        assert_eq!(s[1..].iter().map(|s| s.n).sum::<usize>(), 300);
    }
}
