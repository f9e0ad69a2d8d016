//! The cell grid over the (z, r) half-plane: cells for collisions (and later sampling), each
//! split into sub × sub subcells for partner selection.
//!
//! Axial zones: upstream [z_min, 0], bore [0, t] (only when t > 0), downstream [t, z_max];
//! radial zones: [0, a] and [a, R]. Each zone is uniform, and zone edges lie on the partition
//! faces and the hole edge, so no cell straddles a wall. Cells in the bore zone beyond r = a are
//! solid (zero volume, never occupied). Cell index = column · rows + row. Invariant: every point
//! of the gas maps to a cell of positive volume.

use serde::Serialize;

/// A uniform run of cells along one coordinate.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Zone {
    /// Coordinate where the zone starts, m.
    pub start: f64,
    /// Cell width, m.
    pub width: f64,
    /// Number of cells.
    pub count: usize,
}

impl Zone {
    fn new(start: f64, end: f64, target: f64) -> Zone {
        let count = ((end - start) / target).round().max(1.0) as usize;
        Zone {
            start,
            width: (end - start) / count as f64,
            count,
        }
    }
    fn end(&self) -> f64 {
        self.start + self.width * self.count as f64
    }
}

/// Most zones an axis has (upstream, bore, downstream).
const MAX_ZONES: usize = 3;

/// What [`Axis::locate`] needs of one zone, in a fixed-size table so that the lookup runs
/// without loops or bounds checks (it runs several times per molecule and step).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Lookup {
    /// Zone start, m (+∞ for an unused entry, which no coordinate reaches).
    start: f64,
    inv_width: f64,
    /// Index of the zone's first cell.
    offset: usize,
    /// Index of the zone's last cell relative to its first, as a float (for the clamp).
    last: f64,
}

/// Edges and lookup of a coordinate split into consecutive zones.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Axis {
    pub zones: Vec<Zone>,
    #[serde(skip)]
    offsets: Vec<usize>,
    #[serde(skip)]
    lookup: [Lookup; MAX_ZONES],
}

impl Axis {
    /// Build from zones given as (start, end) with a target cell width.
    pub fn new(bounds: &[(f64, f64)], target: f64) -> Axis {
        let zones: Vec<Zone> = bounds
            .iter()
            .filter(|(a, b)| b > a)
            .map(|&(a, b)| Zone::new(a, b, target))
            .collect();
        let mut offsets = vec![0];
        for z in &zones {
            offsets.push(offsets.last().unwrap() + z.count);
        }
        assert!(
            zones.len() <= MAX_ZONES,
            "at most {MAX_ZONES} zones per axis"
        );
        let mut lookup = [Lookup {
            start: f64::INFINITY,
            inv_width: 0.0,
            offset: 0,
            last: 0.0,
        }; MAX_ZONES];
        for (k, z) in zones.iter().enumerate() {
            lookup[k] = Lookup {
                start: z.start,
                inv_width: 1.0 / z.width,
                offset: offsets[k],
                last: (z.count - 1) as f64,
            };
        }
        Axis {
            zones,
            offsets,
            lookup,
        }
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        *self.offsets.last().unwrap()
    }

    /// True when there are no cells.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Cell index of coordinate x and the fractional position inside the cell in [0, 1).
    #[inline]
    pub fn locate(&self, x: f64) -> (usize, f64) {
        // Zone starts increase, so the zone is the number of later starts at or below x; the
        // first zone also takes every x below its start (clamped to its first cell).
        let k = usize::from(x >= self.lookup[1].start) + usize::from(x >= self.lookup[2].start);
        let z = &self.lookup[k];
        let u = ((x - z.start) * z.inv_width).max(0.0);
        // Clamped first, the float is a small non-negative integer part (max maps NaN to 0),
        // so the conversion to i32 is exact and needs none of the range fix-ups that a
        // conversion to usize compiles to.
        let i = u.min(z.last) as i32 as usize;
        (z.offset + i, (u - i as f64).clamp(0.0, 0.999_999_999))
    }

    /// Lower and upper edge of cell i.
    pub fn edges(&self, i: usize) -> (f64, f64) {
        let k = self.offsets.partition_point(|&o| o <= i) - 1;
        let z = &self.zones[k];
        let j = i - self.offsets[k];
        let lo = z.start + z.width * j as f64;
        let hi = if j + 1 == z.count {
            z.end()
        } else {
            lo + z.width
        };
        (lo, hi)
    }

    /// Centre of cell i.
    pub fn center(&self, i: usize) -> f64 {
        let (a, b) = self.edges(i);
        0.5 * (a + b)
    }

    /// Smallest cell width.
    pub fn min_width(&self) -> f64 {
        self.zones
            .iter()
            .map(|z| z.width)
            .fold(f64::INFINITY, f64::min)
    }
}

/// The (z, r) cell grid.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Grid {
    pub z: Axis,
    pub r: Axis,
    /// Subcells per cell along each direction.
    pub sub: usize,
    /// Gas volume of each cell, m³ (0 for solid cells).
    #[serde(skip)]
    pub volume: Vec<f64>,
}

impl Grid {
    /// Grid for an aperture of radius `a`, partition thickness `t`, domain z ∈ [z_min, z_max],
    /// r ∈ [0, r_max], target cell size `cell` and `sub` subcells per direction.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        symmetry: crate::geometry::Symmetry,
        a: f64,
        t: f64,
        z_min: f64,
        z_max: f64,
        r_max: f64,
        cell: f64,
        sub: usize,
    ) -> Grid {
        let z = Axis::new(&[(z_min, 0.0), (0.0, t), (t, z_max)], cell);
        let r = Axis::new(&[(0.0, a), (a, r_max)], cell);
        let mut volume = vec![0.0; z.len() * r.len()];
        for iz in 0..z.len() {
            let (z0, z1) = z.edges(iz);
            let zc = 0.5 * (z0 + z1);
            for ir in 0..r.len() {
                let (r0, r1) = r.edges(ir);
                let rc = 0.5 * (r0 + r1);
                let solid = t > 0.0 && zc > 0.0 && zc < t && rc > a;
                if !solid {
                    volume[iz * r.len() + ir] = symmetry.ring_area(r0, r1) * (z1 - z0);
                }
            }
        }
        Grid {
            z,
            r,
            sub: sub.max(1),
            volume,
        }
    }

    /// Axial columns of the upstream zone (z < 0); they come first in the cell order.
    pub fn upstream_columns(&self) -> usize {
        self.z.zones[0].count
    }

    /// Number of cells (including solid ones).
    pub fn cells(&self) -> usize {
        self.volume.len()
    }

    /// Subcells per cell.
    pub fn subcells(&self) -> usize {
        self.sub * self.sub
    }

    /// Radial row of radius r.
    #[inline]
    pub fn row(&self, r: f64) -> usize {
        self.r.locate(r).0
    }

    /// Cell of (z, r).
    #[inline]
    pub fn cell(&self, z: f64, r: f64) -> usize {
        self.z.locate(z).0 * self.r.len() + self.r.locate(r).0
    }

    /// Sort key (cell · subcells + subcell) of (z, r).
    #[inline]
    pub fn key(&self, z: f64, r: f64) -> usize {
        let (iz, fz) = self.z.locate(z);
        let (ir, fr) = self.r.locate(r);
        if self.sub == 1 {
            return iz * self.r.len() + ir;
        }
        let s = self.sub as f64;
        let sub = (fz * s) as usize * self.sub + (fr * s) as usize;
        (iz * self.r.len() + ir) * self.subcells() + sub
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zones_align_with_walls_and_volumes_add_up() {
        let (a, t) = (1.0, 0.7);
        let g = Grid::new(
            crate::geometry::Symmetry::Axisymmetric,
            a,
            t,
            -3.0,
            t + 2.0,
            2.5,
            0.3,
            2,
        );
        // the zone edges include the partition faces and the hole edge
        assert!(g.z.zones.iter().any(|z| z.start == 0.0) && g.z.zones.iter().any(|z| z.start == t));
        assert!(g.r.zones.iter().any(|z| z.start == a));
        let total: f64 = g.volume.iter().sum();
        let pi = std::f64::consts::PI;
        let expected = pi * 2.5 * 2.5 * 5.0 + pi * a * a * t;
        assert!((total / expected - 1.0).abs() < 1e-12);
        // a gas point maps to a cell with volume
        for (z, r) in [(-2.9, 2.4), (0.3, 0.99), (t + 0.1, 2.49), (0.0, 0.5)] {
            assert!(g.volume[g.cell(z, r)] > 0.0, "({z}, {r})");
        }
        let k = g.key(-2.9, 0.01);
        assert!(k < g.cells() * g.subcells());
    }
}
