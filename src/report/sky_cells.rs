//! An equal-area grid of the sphere, of our own: latitude zones bounded by parallels, each cut
//! into equal ranges of longitude, with the zone edges placed in sin(latitude) so that every
//! cell has the same solid angle 4π/N.
//!
//! Construction (a zonal equal-area partition, in the manner of P. Leopardi 2006, "A partition
//! of the unit sphere into regions of equal area and small diameter", Electronic Transactions on
//! Numerical Analysis 25, 309–327, but simpler): for Z zones of nominal height 180°/Z, zone k
//! gets m_k = max(1, round(2Z cos b_k)) cells (b_k the nominal centre latitude, so cells are
//! roughly as wide as they are high); with N = Σ m_k, the zone edges are
//! s_0 = −1, s_{k+1} = s_k + 2 m_k / N in s = sin b. A zone between s_k and s_{k+1} covers
//! 2π (s_{k+1} − s_k) sr (Archimedes' hat-box theorem), so each of its m_k cells covers
//! 2π · 2 m_k / (N m_k) = 4π/N exactly. Longitude edges start at 180°, so no cell straddles the
//! edge of a map centred on longitude 0.
//!
//! Pure: no I/O.

use std::f64::consts::PI;

/// One latitude zone.
#[derive(Debug, Clone, Copy)]
struct Zone {
    sin_lo: f64,
    sin_hi: f64,
    cells: usize,
    first: usize,
}

/// The bounds of one cell, degrees: longitude from `lon_lo` to `lon_lo + lon_width`
/// (eastwards, may pass 360), latitude from `lat_lo` to `lat_hi`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CellBounds {
    pub lon_lo: f64,
    pub lon_width: f64,
    pub lat_lo: f64,
    pub lat_hi: f64,
}

/// The grid.
#[derive(Debug, Clone)]
pub struct SkyGrid {
    zones: Vec<Zone>,
    n: usize,
}

impl SkyGrid {
    /// The grid of `zones` latitude zones (at least 1).
    pub fn with_zones(zones: usize) -> SkyGrid {
        let z = zones.max(1);
        let counts: Vec<usize> = (0..z)
            .map(|k| {
                let b = -90.0 + 180.0 * (k as f64 + 0.5) / z as f64;
                ((2.0 * z as f64 * b.to_radians().cos()).round() as usize).max(1)
            })
            .collect();
        let n: usize = counts.iter().sum();
        let mut out = Vec::with_capacity(z);
        let (mut s, mut first) = (-1.0, 0);
        for (k, &m) in counts.iter().enumerate() {
            let hi = if k + 1 == z {
                1.0
            } else {
                s + 2.0 * m as f64 / n as f64
            };
            out.push(Zone {
                sin_lo: s,
                sin_hi: hi,
                cells: m,
                first,
            });
            s = hi;
            first += m;
        }
        SkyGrid { zones: out, n }
    }

    /// The grid whose cell count is closest to `target` (2 to 24 zones).
    pub fn near(target: usize) -> SkyGrid {
        (2..=24)
            .map(SkyGrid::with_zones)
            .min_by_key(|g| g.len().abs_diff(target))
            .unwrap_or_else(|| SkyGrid::with_zones(4))
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.n
    }

    pub fn is_empty(&self) -> bool {
        self.n == 0
    }

    /// Solid angle of every cell, sr.
    pub fn cell_solid_angle(&self) -> f64 {
        4.0 * PI / self.n as f64
    }

    /// The cell holding (lon, lat) in degrees; None for a position that is not finite or a
    /// latitude beyond ±90°.
    pub fn cell(&self, lon_deg: f64, lat_deg: f64) -> Option<usize> {
        if !(lon_deg.is_finite() && lat_deg.is_finite()) || lat_deg.abs() > 90.0 {
            return None;
        }
        let s = lat_deg.to_radians().sin();
        let zone = self
            .zones
            .iter()
            .find(|z| s < z.sin_hi)
            .or(self.zones.last())?;
        let width = 360.0 / zone.cells as f64;
        let offset = (lon_deg - 180.0).rem_euclid(360.0);
        let j = ((offset / width).floor() as usize).min(zone.cells - 1);
        Some(zone.first + j)
    }

    fn zone_of(&self, cell: usize) -> Option<(&Zone, usize)> {
        self.zones
            .iter()
            .find(|z| cell >= z.first && cell < z.first + z.cells)
            .map(|z| (z, cell - z.first))
    }

    /// The bounds of a cell; None for an index beyond the grid.
    pub fn bounds(&self, cell: usize) -> Option<CellBounds> {
        let (z, j) = self.zone_of(cell)?;
        let width = 360.0 / z.cells as f64;
        Some(CellBounds {
            lon_lo: 180.0 + j as f64 * width,
            lon_width: width,
            lat_lo: z.sin_lo.clamp(-1.0, 1.0).asin().to_degrees(),
            lat_hi: z.sin_hi.clamp(-1.0, 1.0).asin().to_degrees(),
        })
    }

    /// The centre of a cell, degrees: the middle longitude (in [0°, 360°)) and the latitude
    /// that halves its area, asin((s_lo + s_hi)/2).
    pub fn centre(&self, cell: usize) -> Option<(f64, f64)> {
        let (z, _) = self.zone_of(cell)?;
        let b = self.bounds(cell)?;
        let lon = (b.lon_lo + 0.5 * b.lon_width).rem_euclid(360.0);
        let lat = (0.5 * (z.sin_lo + z.sin_hi)).asin().to_degrees();
        Some((lon, lat))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_position_has_a_cell_and_cells_have_their_positions() {
        let g = SkyGrid::with_zones(6);
        for i in 0..g.len() {
            let (lon, lat) = g.centre(i).unwrap();
            assert_eq!(g.cell(lon, lat), Some(i), "{i}");
        }
        assert!(g.cell(10.0, 90.0).is_some() && g.cell(10.0, -90.0).is_some());
        assert_eq!(g.cell(f64::NAN, 0.0), None);
        assert_eq!(g.bounds(g.len()), None);
    }
}
