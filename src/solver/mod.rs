//! How the model is solved: conservative finite volumes in space, TR-BDF2 in time.
//!
//! Space: the cell-centred finite-volume scheme of [`assemble`] on the graded grid of
//! [`grid`] turns the PDE of [`crate::model`] into the system du/dt = F(u, t) with a
//! tridiagonal Jacobian.
//!
//! Time: TR-BDF2 with γ = 2 − √2 — a trapezoidal stage to t + γh followed by a BDF2 stage to
//! t + h:
//!
//! ```text
//!   u_γ − d h F(u_γ)     = u_n + d h F(u_n)                 d = γ/2 = 1 − 1/√2
//!   u_{n+1} − d h F(u_{n+1}) = a u_γ − b u_n                a = 1/(γ(2−γ)), b = (1−γ)²/(γ(2−γ))
//! ```
//!
//! The scheme is second-order and L-stable, so the step change at t = 0 (a face suddenly held
//! at a new value) does not ring as plain Crank–Nicolson does. Both stages share the matrix
//! I − d h J. The local error is estimated from the three stage derivatives (a divided
//! difference, filtered by (I − d h J)⁻¹ for stiff components) and the step adapts to keep it
//! below the tolerance; steps land exactly on every row of a boundary time table and on every
//! requested output time, except that output times denser than the steps are interpolated with
//! the step's cubic Hermite interpolant (see `interpolate_outputs`). Each stage is solved by Newton's method to convergence when D depends
//! on u; when the problem is linear, one tridiagonal solve is exact.
//!
//! Conservation: the amount in the sample and the cumulative amount through each end are
//! advanced with the same stage weights, so amount(t) − amount(0) equals the cumulative inflow
//! (plus volume sources) to round-off.
//!
//! The step sequence of one solve can be replayed exactly on the next ([`StepPlan::Replay`]):
//! a fit perturbing a parameter by a small amount then sees a model that is a smooth function of
//! the parameter, not one whose step sequence jumps.
//!
//! References: R. E. Bank, W. M. Coughran, W. Fichtner, E. H. Grosse, D. J. Rose, R. K. Smith,
//! "Transient simulation of silicon devices and circuits", IEEE Trans. CAD 4 (1985) 436–451;
//! M. E. Hosea, L. F. Shampine, "Analysis and implementation of TR-BDF2", Appl. Numer. Math. 20
//! (1996) 21–37; S. V. Patankar, *Numerical Heat Transfer and Fluid Flow* (1980), ch. 4.

// Numerical kernels index several arrays in step; index loops read best there.
#![allow(clippy::needless_range_loop)]

pub mod assemble;
pub mod grid;
mod linear_step;
pub mod observe;
pub mod tridiag;

pub use assemble::EndFluxes;
pub use grid::{Grid, GridOptions};
pub use observe::Observable;

use crate::error::{Error, Result};
use crate::model::{End, EndCondition, Model};
use assemble::{FaceWork, Operator};
use observe::Stencil;
use tridiag::{Factored, TwoWay};

const GAMMA: f64 = 2.0 - std::f64::consts::SQRT_2;
const D_COEF: f64 = GAMMA / 2.0;
/// Error constant of TR-BDF2: k = (−3γ² + 4γ − 2) / (12 (2 − γ)) (Bank et al. 1985).
const ERR_COEF: f64 = (-3.0 * GAMMA * GAMMA + 4.0 * GAMMA - 2.0) / (12.0 * (2.0 - GAMMA));

/// Options of the solver. Defaults are chosen for accuracy (M_t/M_∞ to better than 1e-4
/// relative on the reference problems) without tuning.
#[derive(Debug, Clone, PartialEq)]
pub struct SolverOptions {
    /// Local error tolerance per step, relative to the problem's value scale.
    pub tolerance: f64,
    /// The grid.
    pub grid: GridOptions,
    /// Most steps allowed in one solve.
    pub maximum_steps: usize,
    /// Newton iterations allowed per stage (nonlinear D only).
    pub maximum_newton_iterations: usize,
}

impl Default for SolverOptions {
    fn default() -> Self {
        SolverOptions {
            tolerance: 1e-6,
            grid: GridOptions::default(),
            maximum_steps: 200_000,
            maximum_newton_iterations: 30,
        }
    }
}

impl SolverOptions {
    /// Check the options.
    pub fn validate(&self) -> Result<()> {
        if !(self.tolerance > 0.0 && self.tolerance < 0.1) {
            return Err(Error::setting(
                "solver.tolerance",
                format!("must be between 0 and 0.1, found {}", self.tolerance),
            ));
        }
        if self.maximum_steps == 0 || self.maximum_newton_iterations == 0 {
            return Err(Error::setting(
                "solver",
                "step and iteration limits must be positive",
            ));
        }
        self.grid.validate()
    }
}

/// How the steps are chosen.
#[derive(Debug, Clone, Copy)]
pub enum StepPlan<'a> {
    /// Error-controlled steps (the default).
    Adaptive,
    /// `n` equal steps to the last output time, each split where an output time falls inside
    /// it (refinement studies and benchmarks).
    Fixed(usize),
    /// Exactly the step end times of an earlier solve ([`Solver::schedule`]); they must include
    /// every table row of the boundary conditions and reach the last output time (output times
    /// between step ends are interpolated).
    Replay(&'a [f64]),
}

/// What to compute: observables at times (s). Times need not be sorted; none may be negative.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Request {
    /// Output times, s.
    pub times: Vec<f64>,
    /// Observables, each computed at every time.
    pub observables: Vec<Observable>,
}

/// Step counts of a solve.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct SolveStats {
    /// Accepted steps.
    pub steps: usize,
    /// Rejected step attempts.
    pub rejected: usize,
    /// Newton iterations (0 for linear problems, which need none).
    pub newton_iterations: usize,
    /// Largest round-off correction of the amount applied in one step, relative to the amount
    /// scale (see the module docs); a value far above 1e-13 would mean a conservation defect.
    pub largest_amount_correction: f64,
}

/// The computed observables.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Solution {
    n_times: usize,
    /// values[o * n_times + k]: observable o at requested time k.
    values: Vec<f64>,
    /// Step counts.
    pub stats: SolveStats,
}

impl Solution {
    /// Observable `o` (index in the request) at every requested time, in request order.
    pub fn series(&self, o: usize) -> &[f64] {
        &self.values[o * self.n_times..(o + 1) * self.n_times]
    }

    /// Observable `o` at requested time `k`.
    pub fn get(&self, o: usize, k: usize) -> f64 {
        self.values[o * self.n_times + k]
    }
}

/// Where a solve records its observables (`values[o * n_stops + k]` for observable o at stop
/// k), with the reference amounts of the uptake observables: the amount at t = 0 and at
/// equilibrium.
struct Recorder<'a> {
    request: &'a Request,
    amount0: f64,
    amount_inf: f64,
    values: &'a mut [f64],
}

/// One accepted step, for the interpolation of the outputs inside it.
struct Span {
    t0: f64,
    t1: f64,
    /// Cumulative flow per unit end area through (left, right) at t0 and t1.
    cum0: (f64, f64),
    cum1: (f64, f64),
    /// End fluxes at t0 and t1.
    flux0: EndFluxes,
    flux1: EndFluxes,
}

/// Work space for the time loop, allocated once per grid size.
#[derive(Debug, Clone, Default)]
struct Work {
    u: Vec<f64>,
    u_n: Vec<f64>,
    u_g: Vec<f64>,
    f_n: Vec<f64>,
    f_g: Vec<f64>,
    f_1: Vec<f64>,
    rhs: Vec<f64>,
    est: Vec<f64>,
    delta: Vec<f64>,
    fe: Vec<f64>,
    jl: Vec<f64>,
    jd: Vec<f64>,
    ju: Vec<f64>,
    ml: Vec<f64>,
    md: Vec<f64>,
    mu: Vec<f64>,
    faces: FaceWork,
    fact: Factored,
    two: TwoWay,
    /// A state interpolated inside a step, filled only in the cells the observables read.
    u_mid: Vec<f64>,
}

impl Work {
    fn resize(&mut self, n: usize) {
        for v in [
            &mut self.u,
            &mut self.u_n,
            &mut self.u_g,
            &mut self.f_n,
            &mut self.f_g,
            &mut self.f_1,
            &mut self.rhs,
            &mut self.est,
            &mut self.delta,
            &mut self.fe,
            &mut self.jl,
            &mut self.jd,
            &mut self.ju,
            &mut self.ml,
            &mut self.md,
            &mut self.mu,
            &mut self.u_mid,
        ] {
            v.clear();
            v.resize(n, 0.0);
        }
        self.faces = FaceWork::with_len(n);
        self.fact = Factored::with_len(n);
        self.two = TwoWay::with_len(n);
    }
}

/// A reusable solver: allocate once, solve many times with changed parameters.
#[derive(Debug, Clone)]
pub struct Solver {
    options: SolverOptions,
    grid: Grid,
    grid_key: Option<GridKey>,
    op: Operator,
    work: Work,
    schedule: Vec<f64>,
    /// The stops, unless they are the requested times themselves (`identity`).
    stops: Vec<f64>,
    /// Whether the stops are exactly the requested times (strictly increasing, no table rows
    /// between them): then `stops`, `order`, `is_output` and `is_break` stay empty and the
    /// values are recorded straight into the solution, so a solver costs 8 bytes per
    /// requested time and observable instead of about 34.
    identity: bool,
    /// Number of stops.
    n_stops: usize,
    order: Vec<usize>,
    is_output: Vec<bool>,
    /// Whether each stop is a row of a boundary time table (a step must end there).
    is_break: Vec<bool>,
    stencils: Vec<Option<Stencil>>,
    /// Lowest value of the problem (error-control reference), and the span of its values.
    value_reference: f64,
    value_span: f64,
    /// The cells the observables read (end cells and the stencils' cells), for interpolation.
    read_cells: Vec<usize>,
    at_stops: Vec<f64>,
    solution: Solution,
}

/// What the grid depends on.
#[derive(Debug, Clone, PartialEq)]
struct GridKey {
    shape: crate::model::Shape,
    inner: f64,
    thicknesses: Vec<f64>,
    left_exposed: bool,
    right_exposed: bool,
}

impl GridKey {
    fn of(model: &Model) -> Self {
        GridKey {
            shape: model.geometry.shape,
            inner: model.geometry.inner_radius,
            thicknesses: model.geometry.layers.iter().map(|l| l.thickness).collect(),
            left_exposed: model.left.is_exposed(),
            right_exposed: model.right.is_exposed(),
        }
    }
}

impl Solver {
    /// A solver with the given options.
    pub fn new(options: SolverOptions) -> Result<Self> {
        options.validate()?;
        Ok(Solver::blank(options))
    }

    /// A solver with (validated) `options` that holds nothing yet.
    fn blank(options: SolverOptions) -> Self {
        Solver {
            options,
            grid: Grid::default(),
            grid_key: None,
            op: Operator::default(),
            work: Work::default(),
            schedule: Vec::new(),
            stops: Vec::new(),
            identity: false,
            n_stops: 0,
            order: Vec::new(),
            is_output: Vec::new(),
            is_break: Vec::new(),
            value_reference: 0.0,
            value_span: 0.0,
            read_cells: Vec::new(),
            stencils: Vec::new(),
            at_stops: Vec::new(),
            solution: Solution::default(),
        }
    }

    /// A solver with the same options, grid and work space but none of the buffers that grow
    /// with the number of requested times (stops, recorded values, solution): a spare for
    /// parallel solves that costs a few cells' worth of memory, not a copy of the solution.
    pub fn spare(&self) -> Solver {
        Solver {
            grid: self.grid.clone(),
            grid_key: self.grid_key.clone(),
            op: self.op.clone(),
            work: self.work.clone(),
            ..Solver::blank(self.options.clone())
        }
    }

    /// The grid of the last solve.
    pub fn grid(&self) -> &Grid {
        &self.grid
    }

    /// The state u (one value per cell) at the end of the last solve.
    pub fn state(&self) -> &[f64] {
        &self.work.u
    }

    /// The step end times of the last solve, for [`StepPlan::Replay`].
    pub fn schedule(&self) -> &[f64] {
        &self.schedule
    }

    /// The solution of the last solve (empty before the first; unspecified after a failed
    /// solve).
    pub fn solution(&self) -> &Solution {
        &self.solution
    }

    /// The options.
    pub fn options(&self) -> &SolverOptions {
        &self.options
    }

    /// Solve with error-controlled steps.
    pub fn solve(&mut self, model: &Model, request: &Request) -> Result<&Solution> {
        self.solve_with(model, request, StepPlan::Adaptive)
    }

    /// Solve with the given step plan.
    pub fn solve_with(
        &mut self,
        model: &Model,
        request: &Request,
        plan: StepPlan<'_>,
    ) -> Result<&Solution> {
        model.validate()?;
        self.prepare(model, request)?;
        self.run(model, request, plan, None)?;
        Ok(&self.solution)
    }

    /// Solve with the given step plan and write the values into `out`, observables × times,
    /// observable first (the layout of [`Solution`]: `out[o * n_times + k]`). When the
    /// requested times are strictly increasing and no boundary table row falls between them,
    /// the values are recorded in `out` as the solve goes and the solver keeps no copy (8 bytes
    /// per value saved, tens of MB for a long record); otherwise the solution is formed and
    /// copied. [`Solver::solution`] is unspecified afterwards. Returns the step counts.
    pub fn solve_into(
        &mut self,
        model: &Model,
        request: &Request,
        plan: StepPlan<'_>,
        out: &mut [f64],
    ) -> Result<SolveStats> {
        let expected = request.observables.len() * request.times.len();
        if out.len() != expected {
            return Err(Error::Internal(format!(
                "{} slots given for {expected} solution values",
                out.len()
            )));
        }
        model.validate()?;
        self.prepare(model, request)?;
        self.run(model, request, plan, Some(out))?;
        Ok(self.solution.stats)
    }

    fn prepare(&mut self, model: &Model, request: &Request) -> Result<()> {
        let key = GridKey::of(model);
        if self.grid_key.as_ref() != Some(&key) {
            self.grid = Grid::build(
                &model.geometry,
                &model.left,
                &model.right,
                &self.options.grid,
            )?;
            self.work.resize(self.grid.len());
            self.grid_key = Some(key);
        }
        self.op.update(&self.grid, model);

        for (k, &t) in request.times.iter().enumerate() {
            if !(t.is_finite() && t >= 0.0) {
                return Err(Error::setting(
                    format!("times[{k}]"),
                    format!("output times must be finite and not before 0 s, found {t}"),
                ));
            }
        }
        // Stops: output times and table rows, sorted and unique.
        let t_end = request.times.iter().cloned().fold(0.0, f64::max);
        // Table rows, where the forcing has a kink: every step must end on one.
        self.at_stops.clear();
        for end in [&model.left, &model.right] {
            if let Some(s) = end.signal() {
                self.at_stops.extend(
                    s.breakpoints()
                        .iter()
                        .map(|r| r.0)
                        .filter(|&t| t > 0.0 && t < t_end),
                );
            }
        }
        self.identity = self.at_stops.is_empty() && request.times.windows(2).all(|w| w[0] < w[1]);
        if self.identity {
            self.stops = Vec::new();
            self.is_break = Vec::new();
            self.order = Vec::new();
            self.is_output = Vec::new();
            self.n_stops = request.times.len();
        } else {
            self.stops.clear();
            self.stops.extend_from_slice(&request.times);
            self.stops.extend_from_slice(&self.at_stops);
            self.stops.sort_by(f64::total_cmp);
            self.stops.dedup();
            self.is_break.clear();
            self.is_break.resize(self.stops.len(), false);
            for &b in &self.at_stops {
                let k = self.stops.partition_point(|&s| s < b);
                self.is_break[k] = true;
            }
            self.order.clear();
            for &t in &request.times {
                // Exact match exists by construction.
                self.order.push(self.stops.partition_point(|&s| s < t));
            }
            self.is_output.clear();
            self.is_output.resize(self.stops.len(), false);
            for &k in &self.order {
                self.is_output[k] = true;
            }
            self.n_stops = self.stops.len();
        }

        self.stencils.clear();
        for (o, obs) in request.observables.iter().enumerate() {
            self.stencils.push(match *obs {
                Observable::ValueAt(x) => Some(observe::stencil(&self.grid, &self.op, x).map_err(
                    |e| match e {
                        Error::Setting { message, .. } => {
                            Error::setting(format!("observables[{o}]"), message)
                        }
                        other => other,
                    },
                )?),
                _ => None,
            });
        }
        let n = self.grid.len();
        self.read_cells.clear();
        self.read_cells.extend([0, n - 1]);
        for st in self.stencils.iter().flatten() {
            for p in [st.p0, st.p1] {
                match p {
                    observe::Point::Centre(i) => self.read_cells.push(i),
                    observe::Point::FaceLeftSide(f) | observe::Point::FaceRightSide(f) => {
                        self.read_cells.extend([f.saturating_sub(1), f.min(n - 1)])
                    }
                }
            }
        }
        self.read_cells.sort_unstable();
        self.read_cells.dedup();
        Ok(())
    }

    fn amount(&self, model: &Model, u: &[f64]) -> f64 {
        let m: f64 = self.grid.measures.iter().zip(u).map(|(v, x)| v * x).sum();
        m * model.geometry.shape.measure_factor()
    }

    fn end_area(&self, model: &Model, end: End) -> f64 {
        let a = match end {
            End::Left => self.grid.areas[0],
            End::Right => self.grid.areas[self.grid.len()],
        };
        a * model.geometry.shape.measure_factor()
    }

    /// Record observables at stop index `k` from the current state.
    fn record(&self, model: &Model, rec: &mut Recorder<'_>, k: usize, t: f64, cum: (f64, f64)) {
        let amount = self.amount(model, &self.work.u);
        self.record_state(model, rec, k, t, cum, amount, false);
    }

    /// Record observables at stop index `k` from the amount and cumulative flows given and the
    /// state in `u` (`interpolated`: in `u_mid`, which holds only the cells the observables
    /// read).
    #[allow(clippy::too_many_arguments)]
    fn record_state(
        &self,
        model: &Model,
        rec: &mut Recorder<'_>,
        k: usize,
        t: f64,
        cum: (f64, f64),
        amount: f64,
        interpolated: bool,
    ) {
        let ns = self.n_stops;
        let (amount0, amount_inf) = (rec.amount0, rec.amount_inf);
        let u = if interpolated {
            &self.work.u_mid
        } else {
            &self.work.u
        };
        for (o, obs) in rec.request.observables.iter().enumerate() {
            let v = match *obs {
                Observable::ValueAt(_) => match &self.stencils[o] {
                    Some(s) => s.eval(&self.op, model, u, t),
                    None => f64::NAN,
                },
                Observable::Amount => amount,
                Observable::AmountChange => amount - amount0,
                Observable::Mean => amount / model.geometry.volume(),
                Observable::FractionalUptake => (amount - amount0) / (amount_inf - amount0),
                Observable::FluxIn(end) => self.op.flux_in(model, u, t, end),
                Observable::CumulativeIn(end) | Observable::CumulativeOut(end) => {
                    let q = match end {
                        End::Left => cum.0,
                        End::Right => cum.1,
                    } * self.end_area(model, end);
                    if matches!(obs, Observable::CumulativeOut(_)) {
                        -q
                    } else {
                        q
                    }
                }
            };
            rec.values[o * ns + k] = v;
        }
    }

    /// Run the time loop and record the observables into the solution, or into `into` when it
    /// is given (observables × times values, observable first, as [`Solution`] stores them):
    /// directly when the stops are the requested times, else through the solution.
    fn run(
        &mut self,
        model: &Model,
        request: &Request,
        plan: StepPlan<'_>,
        into: Option<&mut [f64]>,
    ) -> Result<()> {
        let own = std::mem::take(&mut self.stops);
        let stops = if self.identity {
            &request.times[..]
        } else {
            &own[..]
        };
        let (nobs, nt) = (request.observables.len(), request.times.len());
        let out = match into {
            Some(values) if self.identity => self.run_on(model, request, plan, stops, values),
            into => {
                // In request order the solution's own buffer is the recording; otherwise
                // record per stop and pick the requested times out of it.
                let mut values = if self.identity {
                    std::mem::take(&mut self.solution.values)
                } else {
                    std::mem::take(&mut self.at_stops)
                };
                values.clear();
                values.resize(nobs * stops.len(), 0.0);
                let out = self.run_on(model, request, plan, stops, &mut values);
                self.solution.n_times = nt;
                if self.identity {
                    self.solution.values = values;
                } else {
                    let ns = stops.len();
                    self.solution.values.clear();
                    self.solution.values.resize(nobs * nt, 0.0);
                    for o in 0..nobs {
                        for (kk, &sk) in self.order.iter().enumerate() {
                            self.solution.values[o * nt + kk] = values[o * ns + sk];
                        }
                    }
                    self.at_stops = values;
                }
                out.map(|()| {
                    if let Some(into) = into {
                        into.copy_from_slice(&self.solution.values);
                    }
                })
            }
        };
        self.stops = own;
        out
    }

    /// Whether stop `k` is a requested time.
    fn is_output(&self, k: usize) -> bool {
        self.identity || self.is_output[k]
    }

    /// Whether stop `k` is a row of a boundary time table.
    fn is_break(&self, k: usize) -> bool {
        !self.identity && self.is_break[k]
    }

    /// The time loop over `stops`, recording the observables into `values`
    /// (`values[o * stops.len() + k]`, every entry written).
    fn run_on(
        &mut self,
        model: &Model,
        request: &Request,
        plan: StepPlan<'_>,
        stops: &[f64],
        values: &mut [f64],
    ) -> Result<()> {
        let n = self.grid.len();
        let ns = stops.len();
        self.schedule.clear();
        let linear = model.is_linear();
        let mut stats = SolveStats::default();

        // Initial state and reference amounts.
        for i in 0..n {
            self.work.u[i] = model.initial.at(self.grid.centres[i]);
        }
        let amount0 = self.amount(model, &self.work.u);
        let amount_inf = if request.observables.contains(&Observable::FractionalUptake) {
            let eq = model.equilibrium()?;
            let m: f64 = (0..n)
                .map(|i| self.grid.measures[i] * eq[self.grid.layer_of[i]])
                .sum();
            let m = m * model.geometry.shape.measure_factor();
            if (m - amount0).abs() <= 1e-14 * m.abs().max(amount0.abs()) {
                return Err(Error::setting(
                    "observables",
                    "fractional uptake is undefined: the sample starts at its equilibrium",
                ));
            }
            m
        } else {
            f64::NAN
        };
        // Value scale for the error weights.
        // Value scale of the error control: the span of the values the problem holds (initial
        // state, end values, ambient), measured from its lowest value. A level far from zero
        // (temperatures in kelvin) must not loosen the control: what matters is how far the
        // values move, not where they sit.
        let (mut lo, mut hi) = self
            .work
            .u
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                (a.min(x), b.max(x))
            });
        for end in [&model.left, &model.right] {
            if let EndCondition::Value(s) | EndCondition::Transfer { outside: s, .. } = end {
                let (a, b) = s.range();
                lo = lo.min(a);
                hi = hi.max(b);
            }
        }
        if model.sources.exchange_rate != 0.0 {
            lo = lo.min(model.sources.exchange_value);
            hi = hi.max(model.sources.exchange_value);
        }
        let scale = (hi - lo).max(0.0);
        self.value_reference = lo;
        self.value_span = scale;

        // Linear problems: constant Jacobian, F = J u + b(t), assembled once per solve.
        if linear {
            let w = &mut self.work;
            w.u_n.iter_mut().for_each(|x| *x = 0.0);
            self.op.eval(
                model,
                &w.u_n,
                0.0,
                &mut w.f_1,
                &mut w.faces,
                Some((&mut w.jl, &mut w.jd, &mut w.ju)),
            );
        }

        let mut t = 0.0;
        self.eval_f(model, linear, 0.0, false);
        std::mem::swap(&mut self.work.f_n, &mut self.work.fe);
        let mut flux_n = self.op.end_fluxes(model, &self.work.u, 0.0);
        let mut cum = (0.0, 0.0);
        let mut rec = Recorder {
            request,
            amount0,
            amount_inf,
            values,
        };
        let mut k = 0;
        while k < ns && stops[k] == 0.0 {
            self.record(model, &mut rec, k, 0.0, cum);
            k += 1;
        }
        let t_end = stops.last().copied().unwrap_or(0.0);
        let tol = self.options.tolerance;
        let mut h = match plan {
            StepPlan::Fixed(m) => {
                if m == 0 {
                    return Err(Error::setting(
                        "steps",
                        "a fixed step count must be positive",
                    ));
                }
                t_end / m as f64
            }
            _ => {
                let first = stops.get(k).copied().unwrap_or(t_end);
                1e-4 * first
            }
        };
        let mut replay_idx = 0;
        let mut just_rejected = false;
        let mut last_c = f64::NAN;

        while k < ns {
            let stop = stops[k];
            // Choose the step.
            let (t_new, clipped) = match plan {
                StepPlan::Replay(times) => {
                    let Some(&tn) = times.get(replay_idx) else {
                        return Err(Error::Internal(
                            "replayed schedule ends before the last output time".into(),
                        ));
                    };
                    // Output times inside a replayed step are interpolated; table rows are not.
                    let passed = stops[k..].partition_point(|&s| s < tn);
                    if let Some(b) = (k..k + passed).find(|&j| self.is_break(j)) {
                        return Err(Error::Internal(format!(
                            "replayed schedule skips table row {} s",
                            stops[b]
                        )));
                    }
                    (tn, false)
                }
                StepPlan::Adaptive if k + 1 < ns && stops[k + 1] <= t + h => {
                    // Two or more stops within the step the error control allows: end it on
                    // the last of them (or on the first table row), and interpolate the output
                    // times passed on the way (see `interpolate_outputs`).
                    let within = stops[k..].partition_point(|&s| s <= t + h);
                    let mut last = k + within - 1;
                    if let Some(b) = (k..=last).find(|&j| self.is_break(j)) {
                        last = b;
                    }
                    (stops[last], true)
                }
                _ => {
                    let remaining = stop - t;
                    // Stretch a little to land, but never right after a rejection.
                    let stretch = if just_rejected { 1.0 } else { 1.3 };
                    if h * stretch >= remaining {
                        (stop, h < remaining)
                    } else if h * 2.0 > remaining {
                        (t + 0.5 * remaining, true)
                    } else {
                        (t + h, false)
                    }
                }
            };
            let hs = t_new - t;
            if hs.is_nan() || hs <= 0.0 || hs < 1e-14 * t_new.max(1e-300) {
                return Err(Error::Solver {
                    time: t,
                    message: "step size became too small; the problem may be ill-posed".into(),
                });
            }
            if stats.steps + stats.rejected >= self.options.maximum_steps {
                return Err(Error::Solver {
                    time: t,
                    message: format!(
                        "more than {} time steps; raise solver.maximum_steps, loosen \
                         solver.tolerance or check the model settings for extreme values",
                        self.options.maximum_steps
                    ),
                });
            }
            let c = D_COEF * hs;
            let adaptive = matches!(plan, StepPlan::Adaptive);
            let mut linear_outcome = None;
            let ok = if linear {
                linear_outcome = self.step_linear(model, t, hs, c, &mut last_c, adaptive, scale);
                linear_outcome.is_some()
            } else {
                self.step(model, t, hs, c, &mut last_c, &mut stats)
            };
            if !ok {
                {
                    // Newton failed: shrink and retry (or fail when replaying/fixed).
                    stats.rejected += 1;
                    if !matches!(plan, StepPlan::Adaptive) {
                        return Err(Error::Solver {
                            time: t,
                            message: "Newton iteration did not converge on a fixed step".into(),
                        });
                    }
                    h = 0.25 * hs;
                    just_rejected = true;
                    continue;
                }
            }
            // Error norm with weights atol + rtol |u| (adaptive steps only).
            let w = &self.work;
            let enorm = if let (true, Some(o)) = (adaptive, linear_outcome) {
                o.error_norm
            } else if adaptive {
                let reference = self.value_reference;
                let sc = w.u.iter().fold(scale, |m, x| m.max((x - reference).abs()));
                let sc = if sc > 0.0 {
                    sc
                } else {
                    reference.abs().max(1.0)
                };
                // Volume-weighted RMS (the discrete L² norm), as in the linear step.
                let measures = &self.grid.measures;
                let sum: f64 = w.est.iter().zip(measures).map(|(e, m)| m * e * e).sum();
                let total: f64 = measures.iter().sum();
                (sum / total).sqrt() / (tol * sc)
            } else {
                0.0
            };
            let accept = !matches!(plan, StepPlan::Adaptive) || enorm <= 1.0;
            if !accept {
                stats.rejected += 1;
                // Undo: restore u from u_n.
                let w = &mut self.work;
                w.u.copy_from_slice(&w.u_n);
                h = hs * (0.9 * enorm.powf(-1.0 / 3.0)).clamp(0.1, 0.9);
                just_rejected = true;
                continue;
            }
            // Accept: cumulative flux through each end with the stage weights.
            let (a_c, b_c) = (
                1.0 / (GAMMA * (2.0 - GAMMA)),
                (1.0 - GAMMA).powi(2) / (GAMMA * (2.0 - GAMMA)),
            );
            let flux_g = self.op.end_fluxes(model, &self.work.u_g, t + GAMMA * hs);
            let flux_1 = self.op.end_fluxes(model, &self.work.u, t_new);
            let (cum_start, flux_start) = (cum, flux_n);
            let qg = (
                cum.0 + c * (flux_n.left + flux_g.left),
                cum.1 + c * (flux_n.right + flux_g.right),
            );
            cum = (
                a_c * qg.0 - b_c * cum.0 + c * flux_1.left,
                a_c * qg.1 - b_c * cum.1 + c * flux_1.right,
            );
            flux_n = flux_1;
            if model.sources.is_none() {
                // The scheme conserves exactly in exact arithmetic; floating-point round-off
                // in the stiff solves (about 1e-14 of the amount per step) would otherwise
                // accumulate. Remove it with a uniform shift far below the truncation error,
                // so that amount(t) = amount(0) + inflow through both ends to round-off.
                let expected = amount0
                    + cum.0 * self.end_area(model, End::Left)
                    + cum.1 * self.end_area(model, End::Right);
                let now = match linear_outcome {
                    Some(o) => o.measure_sum * model.geometry.shape.measure_factor(),
                    None => self.amount(model, &self.work.u),
                };
                let drift = expected - now;
                let size = now.abs().max(amount0.abs()).max(f64::MIN_POSITIVE);
                stats.largest_amount_correction =
                    stats.largest_amount_correction.max(drift.abs() / size);
                let shift = drift / model.geometry.volume();
                self.work.u.iter_mut().for_each(|x| *x += shift);
            }
            // Output times passed inside the step (dense outputs, or a replayed step).
            let passed = stops[k..].partition_point(|&s| s < t_new);
            if passed > 0 {
                let span = Span {
                    t0: t,
                    t1: t_new,
                    cum0: cum_start,
                    cum1: cum,
                    flux0: flux_start,
                    flux1: flux_1,
                };
                self.interpolate_outputs(model, &mut rec, stops, k..k + passed, &span);
                k += passed;
            }
            std::mem::swap(&mut self.work.f_n, &mut self.work.f_1);
            t = t_new;
            stats.steps += 1;
            just_rejected = false;
            self.schedule.push(t);
            if let StepPlan::Replay(_) = plan {
                replay_idx += 1;
            }
            match plan {
                StepPlan::Adaptive => {
                    let fac = if enorm > 0.0 {
                        (0.9 * enorm.powf(-1.0 / 3.0)).clamp(0.2, 5.0)
                    } else {
                        5.0
                    };
                    let proposal = hs * fac;
                    h = if clipped {
                        proposal.max(h)
                    } else if (1.0..1.3).contains(&fac) {
                        // Keep the step (and the factored matrix) when it would grow only a
                        // little: a new factorization costs more than the few extra steps.
                        hs
                    } else {
                        proposal
                    };
                }
                StepPlan::Fixed(m) => h = t_end / m as f64,
                StepPlan::Replay(_) => {}
            }
            if k < ns && stops[k] == t {
                if self.is_output(k) {
                    self.record(model, &mut rec, k, t, cum);
                }
                k += 1;
            }
        }

        self.solution.stats = stats;
        if rec.values.iter().any(|v| !v.is_finite()) {
            return Err(Error::Solver {
                time: t,
                message: "the solution is not finite; check the settings for extreme values".into(),
            });
        }
        Ok(())
    }

    /// Record the output stops `ks`, which lie inside the step `span` just taken, from the cubic
    /// Hermite interpolant of the step: for y(t₀ + θh) with values y₀, y₁ and slopes y′₀, y′₁,
    ///
    /// ```text
    ///   y = (2θ³ − 3θ² + 1) y₀ + (θ³ − 2θ² + θ) h y′₀ + (3θ² − 2θ³) y₁ + (θ³ − θ²) h y′₁
    /// ```
    ///
    /// applied to the cells the observables read (slopes F(u)), to the amount (slope Σ V F) and
    /// to the cumulative flow through each end (slope: the end flux). Its error is O(h⁴), below
    /// the O(h³) local error of the step itself (E. Hairer, S. P. Nørsett, G. Wanner, *Solving
    /// Ordinary Differential Equations I*, 2nd ed., 1993, §II.6, dense output). Uses `u_n`,
    /// `f_n` (start of the step) and `u`, `f_1` (end), so it runs before `f_n` is replaced.
    fn interpolate_outputs(
        &mut self,
        model: &Model,
        rec: &mut Recorder<'_>,
        stops: &[f64],
        ks: std::ops::Range<usize>,
        span: &Span,
    ) {
        if !ks.clone().any(|j| self.is_output(j)) {
            return;
        }
        let mf = model.geometry.shape.measure_factor();
        let w = &self.work;
        let dot = |a: &[f64]| -> f64 {
            self.grid
                .measures
                .iter()
                .zip(a)
                .map(|(v, x)| v * x)
                .sum::<f64>()
                * mf
        };
        let (a0, a1, da0, da1) = (dot(&w.u_n), dot(&w.u), dot(&w.f_n), dot(&w.f_1));
        let h = span.t1 - span.t0;
        for j in ks {
            if !self.is_output(j) {
                continue;
            }
            let s = stops[j];
            let th = (s - span.t0) / h;
            let (t2, t3) = (th * th, th * th * th);
            let (h00, h10, h01, h11) = (
                2.0 * t3 - 3.0 * t2 + 1.0,
                (t3 - 2.0 * t2 + th) * h,
                3.0 * t2 - 2.0 * t3,
                (t3 - t2) * h,
            );
            let herm =
                |y0: f64, d0: f64, y1: f64, d1: f64| h00 * y0 + h10 * d0 + h01 * y1 + h11 * d1;
            let w = &mut self.work;
            for &c in &self.read_cells {
                w.u_mid[c] = herm(w.u_n[c], w.f_n[c], w.u[c], w.f_1[c]);
            }
            let amount = herm(a0, da0, a1, da1);
            let cum = (
                herm(span.cum0.0, span.flux0.left, span.cum1.0, span.flux1.left),
                herm(span.cum0.1, span.flux0.right, span.cum1.1, span.flux1.right),
            );
            self.record_state(model, rec, j, s, cum, amount, true);
        }
    }

    /// F(u, t) of the current state u into `fe` (and the Jacobian into jl/jd/ju when `jac`).
    fn eval_f(&mut self, model: &Model, linear: bool, t: f64, jac: bool) {
        let w = &mut self.work;
        let n = w.u.len();
        if linear {
            for i in 0..n {
                let mut v = w.jd[i] * w.u[i] + self.op.linear_forcing(model, t, i, n);
                if i > 0 {
                    v += w.jl[i] * w.u[i - 1];
                }
                if i + 1 < n {
                    v += w.ju[i] * w.u[i + 1];
                }
                w.fe[i] = v;
            }
        } else {
            let jacs = if jac {
                Some((&mut w.jl[..], &mut w.jd[..], &mut w.ju[..]))
            } else {
                None
            };
            self.op.eval(model, &w.u, t, &mut w.fe, &mut w.faces, jacs);
        }
    }

    /// Factor I − c J from jl/jd/ju.
    fn factor(&mut self, c: f64) -> bool {
        let w = &mut self.work;
        for i in 0..w.jd.len() {
            w.ml[i] = -c * w.jl[i];
            w.md[i] = 1.0 - c * w.jd[i];
            w.mu[i] = -c * w.ju[i];
        }
        w.fact.factor(&w.ml, &w.md, &w.mu)
    }

    /// Solve the stage equation u − c F(u, t) = rhs of a nonlinear problem by Newton's method;
    /// u holds the initial guess on entry. Returns false when Newton fails. (Linear problems
    /// take the increment form of [`Solver::step_linear`] instead.)
    fn stage(
        &mut self,
        model: &Model,
        t: f64,
        c: f64,
        last_c: &mut f64,
        stats: &mut SolveStats,
    ) -> bool {
        let n = self.work.u.len();
        *last_c = f64::NAN;
        let tol = 1e-3 * self.options.tolerance;
        for _ in 0..self.options.maximum_newton_iterations {
            stats.newton_iterations += 1;
            self.eval_f(model, false, t, true);
            if !self.factor(c) {
                return false;
            }
            let w = &mut self.work;
            let reference = self.value_reference;
            let mut scale = self.value_span;
            for i in 0..n {
                w.delta[i] = w.rhs[i] + c * w.fe[i] - w.u[i];
                scale = scale.max((w.u[i] - reference).abs());
            }
            w.fact.solve(&mut w.delta);
            let scale = if scale > 0.0 {
                scale
            } else {
                reference.abs().max(1.0)
            };
            let mut dmax = 0.0f64;
            for i in 0..n {
                w.u[i] += w.delta[i];
                dmax = dmax.max(w.delta[i].abs());
            }
            if !dmax.is_finite() {
                return false;
            }
            if dmax <= tol * scale {
                // Refresh the Jacobian at the converged state for the error filter.
                self.eval_f(model, false, t, true);
                return self.factor(c);
            }
        }
        false
    }

    /// One TR-BDF2 step of a linear problem (the fused sweeps of [`linear_step`]); `None` when
    /// the matrix is singular or the new state is not finite. The matrix is factored again
    /// only when c changed.
    #[allow(clippy::too_many_arguments)]
    fn step_linear(
        &mut self,
        model: &Model,
        t: f64,
        h: f64,
        c: f64,
        last_c: &mut f64,
        estimate: bool,
        scale: f64,
    ) -> Option<linear_step::Outcome> {
        let n = self.work.u.len();
        let w = &mut self.work;
        if c != *last_c {
            if !w.two.factor(c, &w.jl, &w.jd, &w.ju) {
                *last_c = f64::NAN;
                return None;
            }
            *last_c = c;
        }
        // Forcing b(t) = F(0, t): the source term inside, plus the end terms in the end cells.
        // Grids always have at least two cells (GridOptions::validate).
        let op = &self.op;
        let forcing = linear_step::Forcing {
            interior: op.source_const(),
            first_g: op.linear_forcing(model, t + GAMMA * h, 0, n),
            last_g: op.linear_forcing(model, t + GAMMA * h, n - 1, n),
            first_1: op.linear_forcing(model, t + h, 0, n),
            last_1: op.linear_forcing(model, t + h, n - 1, n),
        };
        let bands = linear_step::Bands {
            jl: &w.jl,
            jd: &w.jd,
            ju: &w.ju,
        };
        let vectors = linear_step::Vectors {
            u: &mut w.u,
            u_n: &mut w.u_n,
            u_g: &mut w.u_g,
            f_n: &w.f_n,
            f_g: &mut w.f_g,
            f_1: &mut w.f_1,
            est: &mut w.est,
            delta: &mut w.delta,
        };
        let constants = linear_step::Constants {
            gamma: GAMMA,
            err_coef: ERR_COEF,
        };
        let weights = linear_step::ErrorWeights {
            tolerance: self.options.tolerance,
            scale,
            reference: self.value_reference,
            measure_total: self.grid.measures.iter().sum(),
        };
        let measures = &self.grid.measures;
        let out = if estimate {
            linear_step::step::<true>(
                &w.two, &bands, forcing, &constants, c, h, measures, vectors, weights,
            )
        } else {
            linear_step::step::<false>(
                &w.two, &bands, forcing, &constants, c, h, measures, vectors, weights,
            )
        };
        if !out.finite {
            // Leave the state as it was before the step, for a retry with a shorter one.
            w.u.copy_from_slice(&w.u_n);
            return None;
        }
        Some(out)
    }

    /// One TR-BDF2 step of a nonlinear problem from (t, u) of size h; leaves u_{n+1} in u,
    /// u_n in u_n, u_γ in u_g, F(u_{n+1}) in f_1 and the filtered error estimate in est. False
    /// when Newton fails.
    fn step(
        &mut self,
        model: &Model,
        t: f64,
        h: f64,
        c: f64,
        last_c: &mut f64,
        stats: &mut SolveStats,
    ) -> bool {
        let n = self.work.u.len();
        let (a_c, b_c) = (
            1.0 / (GAMMA * (2.0 - GAMMA)),
            (1.0 - GAMMA).powi(2) / (GAMMA * (2.0 - GAMMA)),
        );
        {
            let w = &mut self.work;
            w.u_n.copy_from_slice(&w.u);
            for i in 0..n {
                w.rhs[i] = w.u_n[i] + c * w.f_n[i];
            }
        }
        // TR stage to t + γh.
        if !self.stage(model, t + GAMMA * h, c, last_c, stats) {
            self.work.u.copy_from_slice(&self.work.u_n);
            return false;
        }
        {
            let w = &mut self.work;
            for i in 0..n {
                w.f_g[i] = (w.u[i] - w.rhs[i]) / c;
                w.u_g[i] = w.u[i];
                w.rhs[i] = a_c * w.u_g[i] - b_c * w.u_n[i];
                // Predictor for the BDF2 stage: linear extrapolation through u_n and u_γ.
                w.u[i] = w.u_g[i] + (w.u_g[i] - w.u_n[i]) * (1.0 - GAMMA) / GAMMA;
            }
        }
        // BDF2 stage to t + h.
        if !self.stage(model, t + h, c, last_c, stats) {
            self.work.u.copy_from_slice(&self.work.u_n);
            return false;
        }
        let w = &mut self.work;
        for i in 0..n {
            w.f_1[i] = (w.u[i] - w.rhs[i]) / c;
            w.est[i] = 2.0
                * ERR_COEF
                * h
                * (w.f_n[i] / GAMMA - w.f_g[i] / (GAMMA * (1.0 - GAMMA))
                    + w.f_1[i] / (1.0 - GAMMA));
        }
        w.fact.solve(&mut w.est);
        true
    }
}

#[cfg(test)]
mod tests;
