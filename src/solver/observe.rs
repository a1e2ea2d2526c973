//! What the instruments read: observables computed from the discrete state.

use super::assemble::Operator;
use super::grid::Grid;
use crate::error::{Error, Result};
use crate::model::{End, Model};

/// A quantity the model predicts at each requested time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Observable {
    /// u at a position (m), by second-order interpolation between cell centres (and the face
    /// values at ends and interfaces).
    ValueAt(f64),
    /// Amount in the sample: ∫ u dV. Per unit area for a slab, per unit length for a cylinder,
    /// the total for a sphere.
    Amount,
    /// Amount minus the amount at t = 0 (what a balance weighing a sample records).
    AmountChange,
    /// Mean value: amount / volume.
    Mean,
    /// Fractional uptake (M_t − M_0) / (M_∞ − M_0), with M_∞ the equilibrium amount implied by
    /// the end conditions (see [`Model::equilibrium`]).
    FractionalUptake,
    /// Flux entering through an end (positive in).
    FluxIn(End),
    /// Amount that has entered through an end since t = 0 (per unit area for a slab end, per
    /// unit length or in total for cylinders and spheres, i.e. including the face area).
    CumulativeIn(End),
    /// Amount that has left through an end since t = 0 (permeation: the downstream face).
    CumulativeOut(End),
}

/// Where a position falls: interpolate between two points given as "centre i" or "face f".
#[derive(Debug, Clone, Copy)]
pub(crate) enum Point {
    Centre(usize),
    FaceLeftSide(usize),
    FaceRightSide(usize),
}

/// A position's interpolation: value = (1 − w) p0 + w p1.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Stencil {
    pub p0: Point,
    pub p1: Point,
    pub w: f64,
}

/// Build the stencil for position x (m). Errors when x is outside the sample.
pub(crate) fn stencil(grid: &Grid, op: &Operator, x: f64) -> Result<Stencil> {
    let n = grid.len();
    let (lo, hi) = (grid.faces[0], grid.faces[n]);
    let tol = 1e-12 * (hi - lo);
    if !(x.is_finite() && x >= lo - tol && x <= hi + tol) {
        return Err(Error::setting(
            "position",
            format!("position {x} m is outside the sample ({lo} m to {hi} m)"),
        ));
    }
    let x = x.clamp(lo, hi);
    // Cell containing x.
    let i = grid
        .faces
        .partition_point(|&f| f <= x)
        .saturating_sub(1)
        .min(n - 1);
    let c = grid.centres[i];
    let (p0, x0, p1, x1) = if x >= c {
        let fc = i + 1;
        if fc < n && !op.is_interface(fc) {
            (
                Point::Centre(i),
                c,
                Point::Centre(i + 1),
                grid.centres[i + 1],
            )
        } else {
            (Point::Centre(i), c, Point::FaceLeftSide(fc), grid.faces[fc])
        }
    } else {
        let fc = i;
        if fc > 0 && !op.is_interface(fc) {
            (
                Point::Centre(i - 1),
                grid.centres[i - 1],
                Point::Centre(i),
                c,
            )
        } else {
            (
                Point::FaceRightSide(fc),
                grid.faces[fc],
                Point::Centre(i),
                c,
            )
        }
    };
    let w = if x1 > x0 { (x - x0) / (x1 - x0) } else { 0.0 };
    Ok(Stencil { p0, p1, w })
}

impl Stencil {
    pub(crate) fn eval(&self, op: &Operator, model: &Model, u: &[f64], t: f64) -> f64 {
        let val = |p: Point| match p {
            Point::Centre(i) => u[i],
            Point::FaceLeftSide(f) => op.face_value(model, u, t, f, true),
            Point::FaceRightSide(f) => op.face_value(model, u, t, f, false),
        };
        (1.0 - self.w) * val(self.p0) + self.w * val(self.p1)
    }
}
