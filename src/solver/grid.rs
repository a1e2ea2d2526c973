//! The finite-volume grid.
//!
//! Cells are refined toward every *feature*: an exposed end (one that takes a value, flux or
//! transfer condition) and every interface between layers, where the solution has its steepest
//! gradients after a step change. Away from features, cells grow geometrically by a fixed ratio
//! up to a largest size, so cell sizes vary smoothly, which keeps the cell-centred scheme
//! second-order accurate on the non-uniform grid.
//!
//! The grid depends on the geometry and the grid options only, never on D or on boundary
//! values, so a fit that changes D sees a model that changes smoothly.

use crate::error::{Error, Result};
use crate::model::{EndCondition, Geometry};

/// How the grid is built. Sizes are fractions of the layer thickness.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GridOptions {
    /// Smallest cell, at a feature, as a fraction of the layer's thickness.
    pub smallest_cell: f64,
    /// Largest cell as a fraction of the layer's thickness.
    pub largest_cell: f64,
    /// Ratio of neighbouring cell sizes while growing away from a feature (> 1).
    pub growth: f64,
    /// When set, ignore the three settings above and use this many equal cells per layer
    /// (used by refinement studies).
    pub uniform_cells: Option<usize>,
}

impl Default for GridOptions {
    fn default() -> Self {
        GridOptions {
            smallest_cell: 1.0e-4,
            largest_cell: 4.0e-3,
            growth: 1.03,
            uniform_cells: None,
        }
    }
}

impl GridOptions {
    /// A grid of `n` equal cells per layer.
    pub fn uniform(n: usize) -> Self {
        GridOptions {
            uniform_cells: Some(n),
            ..Default::default()
        }
    }

    /// The default grading with every size divided by `factor` (a refinement study's knob).
    pub fn refined(factor: f64) -> Self {
        let d = GridOptions::default();
        GridOptions {
            smallest_cell: d.smallest_cell / factor,
            largest_cell: d.largest_cell / factor,
            growth: 1.0 + (d.growth - 1.0) / factor,
            uniform_cells: None,
        }
    }

    /// Check the options.
    pub fn validate(&self) -> Result<()> {
        if let Some(n) = self.uniform_cells {
            if !(2..=1_000_000).contains(&n) {
                return Err(Error::setting(
                    "solver.uniform_cells",
                    format!("must be between 2 and 1000000, found {n}"),
                ));
            }
            return Ok(());
        }
        let ok = self.smallest_cell > 0.0
            && self.largest_cell >= self.smallest_cell
            && self.largest_cell <= 0.5
            && self.growth > 1.0
            && self.growth <= 2.0;
        if !ok {
            return Err(Error::setting(
                "solver.grid",
                format!(
                    "need 0 < smallest_cell ≤ largest_cell ≤ 0.5 and 1 < growth ≤ 2, found {}, {}, {}",
                    self.smallest_cell, self.largest_cell, self.growth
                ),
            ));
        }
        Ok(())
    }
}

/// A 1-D finite-volume grid. Indices: cells 0..n, faces 0..=n (face i is the left face of cell i).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Grid {
    /// Face coordinates, m (n + 1 of them, increasing).
    pub faces: Vec<f64>,
    /// Cell-centre coordinates, m (midpoints of the faces).
    pub centres: Vec<f64>,
    /// Cell measures ∫ r^s dr over each cell (m^(s+1)); multiply by the shape's measure factor
    /// for a volume.
    pub measures: Vec<f64>,
    /// r^s at each face.
    pub areas: Vec<f64>,
    /// The layer each cell belongs to.
    pub layer_of: Vec<usize>,
}

impl Grid {
    /// Number of cells.
    pub fn len(&self) -> usize {
        self.centres.len()
    }

    /// True when there are no cells.
    pub fn is_empty(&self) -> bool {
        self.centres.is_empty()
    }

    /// True when face `f` (1 ≤ f < n) separates two layers.
    pub fn is_interface(&self, f: usize) -> bool {
        f > 0 && f < self.len() && self.layer_of[f - 1] != self.layer_of[f]
    }

    /// Build the grid for a geometry with given end conditions.
    pub fn build(
        geometry: &Geometry,
        left: &EndCondition,
        right: &EndCondition,
        options: &GridOptions,
    ) -> Result<Grid> {
        options.validate()?;
        let nl = geometry.layers.len();
        let left_exposed = !geometry.has_centre() && left.is_exposed();
        let right_exposed = right.is_exposed();
        let mut faces = vec![geometry.inner_radius];
        let mut layer_of = Vec::new();
        let mut start = geometry.inner_radius;
        for (i, layer) in geometry.layers.iter().enumerate() {
            let refine_lo = if i == 0 { left_exposed } else { true };
            let refine_hi = if i + 1 == nl { right_exposed } else { true };
            let sizes = layer_sizes(layer.thickness, refine_lo, refine_hi, options);
            let mut x = start;
            for (k, h) in sizes.iter().enumerate() {
                x += h;
                // The layer's last face is placed exactly, not accumulated.
                faces.push(if k + 1 == sizes.len() {
                    start + layer.thickness
                } else {
                    x
                });
                layer_of.push(i);
            }
            start += layer.thickness;
        }
        let s = geometry.shape.exponent();
        let n = layer_of.len();
        let mut centres = Vec::with_capacity(n);
        let mut measures = Vec::with_capacity(n);
        for w in faces.windows(2) {
            centres.push(0.5 * (w[0] + w[1]));
            measures.push((w[1].powi(s + 1) - w[0].powi(s + 1)) / (s + 1) as f64);
        }
        let areas = faces.iter().map(|r| r.powi(s)).collect();
        Ok(Grid {
            faces,
            centres,
            measures,
            areas,
            layer_of,
        })
    }
}

/// Cell sizes for one layer of thickness `length`, refined at the flagged ends.
fn layer_sizes(length: f64, refine_lo: bool, refine_hi: bool, o: &GridOptions) -> Vec<f64> {
    if let Some(n) = o.uniform_cells {
        return vec![length / n as f64; n];
    }
    let hmin = o.smallest_cell * length;
    let hmax = o.largest_cell * length;
    // Grow from hmin until `span` is covered.
    let graded = |span: f64| -> Vec<f64> {
        let mut v = Vec::new();
        let mut h = hmin;
        let mut sum = 0.0;
        while sum < span {
            v.push(h);
            sum += h;
            h = (h * o.growth).min(hmax);
        }
        let scale = span / sum;
        v.iter_mut().for_each(|h| *h *= scale);
        v
    };
    match (refine_lo, refine_hi) {
        (true, true) => {
            let half = graded(0.5 * length);
            let mut v = half.clone();
            v.extend(half.iter().rev());
            v
        }
        (true, false) => graded(length),
        (false, true) => {
            let mut v = graded(length);
            v.reverse();
            v
        }
        (false, false) => {
            let n = (1.0 / o.largest_cell).ceil().max(4.0) as usize;
            vec![length / n as f64; n]
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::{Geometry, Shape};

    #[test]
    fn default_grid_is_graded_and_exact() {
        let g = Geometry::slab(1e-3, 1e-12);
        let v = EndCondition::value(1.0);
        let grid = Grid::build(&g, &v, &v, &GridOptions::default()).unwrap();
        assert_eq!(grid.faces[0], 0.0);
        assert_eq!(*grid.faces.last().unwrap(), 1e-3);
        assert!(grid.len() > 200 && grid.len() < 600, "{} cells", grid.len());
        let h: Vec<f64> = grid.faces.windows(2).map(|w| w[1] - w[0]).collect();
        assert!(h[0] < 1.5e-7 && h[h.len() - 1] < 1.5e-7);
        for w in h.windows(2) {
            let r = w[1] / w[0];
            assert!(r < 1.031 && r > 1.0 / 1.031, "ratio {r}");
        }
        let total: f64 = grid.measures.iter().sum();
        assert!((total - 1e-3).abs() < 1e-18);
    }

    #[test]
    fn sphere_measures_sum_to_volume() {
        let g = Geometry::solid(Shape::Sphere, 2e-3, 1e-10);
        let grid = Grid::build(
            &g,
            &EndCondition::Sealed,
            &EndCondition::value(1.0),
            &Default::default(),
        )
        .unwrap();
        let total: f64 = grid.measures.iter().sum::<f64>() * g.shape.measure_factor();
        assert!((total / g.volume() - 1.0).abs() < 1e-12);
        assert_eq!(grid.areas[0], 0.0);
    }

    #[test]
    fn rejects_bad_options() {
        let bad = GridOptions {
            growth: 0.9,
            ..Default::default()
        };
        assert!(bad.validate().is_err());
        assert!(GridOptions::uniform(1).validate().is_err());
        assert!(GridOptions::uniform(50).validate().is_ok());
    }
}
