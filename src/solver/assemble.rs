//! Finite-volume assembly of the semi-discrete system du/dt = F(u, t) and its Jacobian.
//!
//! For cell i with measure V_i and faces i (left) and i+1 (right) of area a = r^s:
//!
//! ```text
//!   dU_i/dt = ( a_i G_i − a_{i+1} G_{i+1} ) / V_i − m (U_i − u_env) − k U_i
//! ```
//!
//! where G_f is the flux through face f in the +r direction. Fluxes:
//!
//! * inside a layer, G = (Φ(U_{i−1}) − Φ(U_i)) / Δr with Φ(u) = ∫ D du the Kirchhoff integral
//!   (exact at steady state for any D(u); the usual D Δu/Δr for constant D);
//! * across a layer interface with partition K (u_right = K u_left at the interface),
//!   resistances in series: G = (K U_{i−1} − U_i) / (K δ_L / D_{i−1} + δ_R / D_i);
//! * a fixed value u_b at an end: G = (Φ(u_b) − Φ(U₀)) / δ with δ the centre-to-face distance;
//! * a fixed flux: G = ±J(t);
//! * surface transfer: J_in = (K u_out − U₀) / (1/h + δ / D(U₀)), the surface value eliminated;
//! * a sealed end or a symmetry centre: G = 0.
//!
//! The Jacobian is tridiagonal. It is exact inside layers and at fixed-value ends; at
//! interfaces and transfer ends D is frozen at the cell values in the Jacobian only (Newton then
//! converges linearly there, to the same solution).

use super::grid::Grid;
use crate::model::{DiffusivityLaw, End, EndCondition, Model};

/// Precomputed geometry of the operator for one grid.
#[derive(Debug, Clone, Default)]
pub(crate) struct Operator {
    /// 1 / V_i.
    inv_measure: Vec<f64>,
    /// Face areas r^s.
    area: Vec<f64>,
    /// Centre-to-centre distance for interior faces (index f = 1..n−1), or centre-to-face for
    /// the end faces (0 and n).
    dist: Vec<f64>,
    /// For interface faces: (δ_L, δ_R, K); zero-filled otherwise.
    interface: Vec<Option<(f64, f64, f64)>>,
    /// Per-cell diffusivity law.
    law: Vec<DiffusivityLaw>,
    /// Exchange + reaction rate, 1/s.
    sink_rate: f64,
    /// m u_env, the constant part of the exchange term.
    source_const: f64,
    /// Left end condition active (false at a symmetry centre).
    left_active: bool,
}

/// Fluxes entering the sample through each end (positive in).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct EndFluxes {
    /// Through the left end.
    pub left: f64,
    /// Through the right end.
    pub right: f64,
}

impl Operator {
    /// Rebuild for a grid and model, reusing the existing allocations.
    pub(crate) fn update(&mut self, grid: &Grid, model: &Model) {
        let n = grid.len();
        let dist = &mut self.dist;
        dist.clear();
        dist.resize(n + 1, 0.0);
        let interface = &mut self.interface;
        interface.clear();
        interface.resize(n + 1, None);
        dist[0] = grid.centres[0] - grid.faces[0];
        dist[n] = grid.faces[n] - grid.centres[n - 1];
        for f in 1..n {
            dist[f] = grid.centres[f] - grid.centres[f - 1];
            if grid.is_interface(f) {
                let k = model.geometry.layers[grid.layer_of[f - 1]].partition_to_next;
                interface[f] = Some((
                    grid.faces[f] - grid.centres[f - 1],
                    grid.centres[f] - grid.faces[f],
                    k,
                ));
            }
        }
        self.law.clear();
        self.law.extend(
            grid.layer_of
                .iter()
                .map(|&l| model.geometry.layers[l].diffusivity),
        );
        self.inv_measure.clear();
        self.inv_measure
            .extend(grid.measures.iter().map(|v| 1.0 / v));
        self.area.clear();
        self.area.extend_from_slice(&grid.areas);
        let s = &model.sources;
        self.sink_rate = s.exchange_rate + s.reaction_rate;
        self.source_const = s.exchange_rate * s.exchange_value;
        self.left_active = !model.geometry.has_centre();
    }

    /// The constant volume source m u_env, 1/s times the unit of u.
    pub(crate) fn source_const(&self) -> f64 {
        self.source_const
    }

    /// The constant part b(t) of F(u, t) = J u + b(t) for a linear problem, in cell i, or the
    /// source term alone for interior cells.
    pub(crate) fn linear_forcing(&self, model: &Model, t: f64, i: usize, n: usize) -> f64 {
        let mut b = self.source_const;
        if i == 0 && self.left_active {
            let j = self
                .end_flux(&model.left, 0.0, &self.law[0], self.dist[0], t)
                .0;
            b += self.area[0] * j * self.inv_measure[0];
        }
        if i + 1 == n {
            let j = self
                .end_flux(&model.right, 0.0, &self.law[n - 1], self.dist[n], t)
                .0;
            b += self.area[n] * j * self.inv_measure[n - 1];
        }
        b
    }

    /// Flux entering through one end and its derivative with respect to the adjacent cell value.
    #[inline]
    fn end_flux(
        &self,
        cond: &EndCondition,
        u_cell: f64,
        law: &DiffusivityLaw,
        dist: f64,
        t: f64,
    ) -> (f64, f64) {
        match cond {
            EndCondition::Sealed => (0.0, 0.0),
            EndCondition::Value(s) => {
                let ub = s.at(t);
                (
                    (law.kirchhoff(ub) - law.kirchhoff(u_cell)) / dist,
                    -law.at(u_cell) / dist,
                )
            }
            EndCondition::Flux(s) => (s.at(t), 0.0),
            EndCondition::Transfer {
                coefficient,
                partition,
                outside,
            } => {
                let r = 1.0 / coefficient + dist / law.at(u_cell);
                ((partition * outside.at(t) - u_cell) / r, -1.0 / r)
            }
        }
    }

    /// The fluxes entering through the ends for state `u` at time `t`.
    pub(crate) fn end_fluxes(&self, model: &Model, u: &[f64], t: f64) -> EndFluxes {
        let n = u.len();
        let left = if self.left_active {
            self.end_flux(&model.left, u[0], &self.law[0], self.dist[0], t)
                .0
        } else {
            0.0
        };
        let right = self
            .end_flux(&model.right, u[n - 1], &self.law[n - 1], self.dist[n], t)
            .0;
        EndFluxes { left, right }
    }

    /// Evaluate F(u, t) into `f`, and when `jac` is given the Jacobian's three diagonals
    /// (lower, diag, upper). `g` and `gl`, `gr` are face work arrays of length n + 1.
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn eval(
        &self,
        model: &Model,
        u: &[f64],
        t: f64,
        f: &mut [f64],
        work: &mut FaceWork,
        jac: Option<(&mut [f64], &mut [f64], &mut [f64])>,
    ) {
        let n = u.len();
        let FaceWork { g, gl, gr, phi } = work;
        for i in 0..n {
            phi[i] = self.law[i].kirchhoff(u[i]);
        }
        // Left end: G_0 = J_in.
        if self.left_active {
            let (j, dj) = self.end_flux(&model.left, u[0], &self.law[0], self.dist[0], t);
            g[0] = j;
            gr[0] = dj;
        } else {
            g[0] = 0.0;
            gr[0] = 0.0;
        }
        gl[0] = 0.0;
        for fc in 1..n {
            match self.interface[fc] {
                None => {
                    let inv = 1.0 / self.dist[fc];
                    g[fc] = (phi[fc - 1] - phi[fc]) * inv;
                    gl[fc] = self.law[fc - 1].at(u[fc - 1]) * inv;
                    gr[fc] = -self.law[fc].at(u[fc]) * inv;
                }
                Some((dl, dr, k)) => {
                    let r = k * dl / self.law[fc - 1].at(u[fc - 1]) + dr / self.law[fc].at(u[fc]);
                    g[fc] = (k * u[fc - 1] - u[fc]) / r;
                    gl[fc] = k / r;
                    gr[fc] = -1.0 / r;
                }
            }
        }
        // Right end: G_n = −J_in.
        let (j, dj) = self.end_flux(&model.right, u[n - 1], &self.law[n - 1], self.dist[n], t);
        g[n] = -j;
        gl[n] = -dj;
        gr[n] = 0.0;

        let a = &self.area;
        for i in 0..n {
            f[i] = (a[i] * g[i] - a[i + 1] * g[i + 1]) * self.inv_measure[i]
                - self.sink_rate * u[i]
                + self.source_const;
        }
        if let Some((lower, diag, upper)) = jac {
            for i in 0..n {
                let iv = self.inv_measure[i];
                lower[i] = if i > 0 { a[i] * gl[i] * iv } else { 0.0 };
                diag[i] = (a[i] * gr[i] - a[i + 1] * gl[i + 1]) * iv - self.sink_rate;
                upper[i] = if i + 1 < n {
                    -a[i + 1] * gr[i + 1] * iv
                } else {
                    0.0
                };
            }
        }
    }

    /// Value just inside face `fc` on its left (`from_left`) or right side, from the cell next
    /// to it and the face flux (first-order Taylor step, so second-order overall).
    pub(crate) fn face_value(
        &self,
        model: &Model,
        u: &[f64],
        t: f64,
        fc: usize,
        from_left: bool,
    ) -> f64 {
        let n = u.len();
        if fc == 0 {
            if let (true, EndCondition::Value(s)) = (self.left_active, &model.left) {
                return s.at(t);
            }
            let j = self.end_fluxes(model, u, t).left; // +r direction flux = J_in
            return u[0] + j * self.dist[0] / self.law[0].at(u[0]);
        }
        if fc == n {
            if let EndCondition::Value(s) = &model.right {
                return s.at(t);
            }
            let j = self.end_fluxes(model, u, t).right; // entering at the right = −r direction
            return u[n - 1] + j * self.dist[n] / self.law[n - 1].at(u[n - 1]);
        }
        // Interface: flux through it, then step from the cell on the requested side.
        let (dl, dr, k) =
            self.interface[fc].unwrap_or((0.5 * self.dist[fc], 0.5 * self.dist[fc], 1.0));
        let dlft = self.law[fc - 1].at(u[fc - 1]);
        let drgt = self.law[fc].at(u[fc]);
        let g = (k * u[fc - 1] - u[fc]) / (k * dl / dlft + dr / drgt);
        if from_left {
            u[fc - 1] - g * dl / dlft
        } else {
            u[fc] + g * dr / drgt
        }
    }

    /// Whether face `fc` is an interface between layers.
    pub(crate) fn is_interface(&self, fc: usize) -> bool {
        self.interface.get(fc).is_some_and(|x| x.is_some())
    }

    /// The flux-in through an end at a state, by end.
    pub(crate) fn flux_in(&self, model: &Model, u: &[f64], t: f64, end: End) -> f64 {
        let e = self.end_fluxes(model, u, t);
        match end {
            End::Left => e.left,
            End::Right => e.right,
        }
    }
}

/// Face work arrays, allocated once per solver.
#[derive(Debug, Clone, Default)]
pub(crate) struct FaceWork {
    g: Vec<f64>,
    gl: Vec<f64>,
    gr: Vec<f64>,
    phi: Vec<f64>,
}

impl FaceWork {
    pub(crate) fn with_len(n: usize) -> Self {
        FaceWork {
            g: vec![0.0; n + 1],
            gl: vec![0.0; n + 1],
            gr: vec![0.0; n + 1],
            phi: vec![0.0; n],
        }
    }
}
