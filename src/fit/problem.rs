//! The interface between the fitting engine and a model: weighted residuals of a full
//! parameter vector.
//!
//! The engine never sees the model itself, only `r(θ)`, the weighted residuals
//! `r_i = (y_i − f_i(θ)) / w_i` with `w_i` a measurement standard uncertainty σ_i (absolute
//! weighting) or a dataset scale (relative weighting). The weights must not depend on θ;
//! the residual bootstrap relies on that (see [`crate::fit::bootstrap`]).
//!
//! [`Evaluator`] wraps a problem for the engine: it maps the internal coordinates of the free
//! parameters to the full SI vector, counts evaluations and turns a failed or non-finite
//! evaluation into `None`, which every optimiser treats as "reject this point".

use crate::error::{Error, Result};
use crate::fit::params::ParamSet;

/// A least-squares problem: residuals `r(θ)` for a full parameter vector θ in SI (free and
/// fixed, in the order of the parameter specs).
///
/// `Clone + Send` so that profile likelihood and bootstrap can run one copy per thread.
pub trait ResidualProblem: Clone + Send {
    /// Number of residuals `n` (constant for the life of the problem).
    fn n_residuals(&self) -> usize;

    /// Weighted residuals (already divided by σ or the dataset scale), written to `out`
    /// (length [`ResidualProblem::n_residuals`]). `&mut self` so the implementation can keep
    /// preallocated work space. An `Err` (e.g. the forward solver failed for these
    /// parameters) makes the optimiser reject the point; it does not end the fit.
    fn residuals(&mut self, params: &[f64], out: &mut [f64]) -> Result<()>;

    /// Residuals at several `points` close to `base` (the columns of a finite-difference
    /// Jacobian at `base`), into `outs` (one vector of length
    /// [`ResidualProblem::n_residuals`] per point); one status per point. An implementation
    /// may solve the points in parallel and reuse the work done at `base`; the results must
    /// equal those of [`ResidualProblem::residuals`] at each point to rounding. Default: one
    /// point after another.
    fn residuals_batch(
        &mut self,
        base: &[f64],
        points: &[Vec<f64>],
        outs: &mut [&mut [f64]],
    ) -> Vec<Result<()>> {
        let _ = base;
        points
            .iter()
            .zip(outs.iter_mut())
            .map(|(p, o)| self.residuals(p, o))
            .collect()
    }

    /// Which residuals at `params` are not observations of a value: readings censored at a
    /// detection limit that the model stays under (their residual is zero by construction and
    /// carries no scatter). The engine leaves them out when it counts points and degrees of
    /// freedom (s², intervals, χ², information criteria, residual checks). Default: none.
    fn inactive(&mut self, params: &[f64]) -> Result<Vec<bool>> {
        let _ = params;
        Ok(vec![false; self.n_residuals()])
    }

    /// Forget any state that makes an evaluation depend on earlier ones (for a model solved
    /// numerically: the step sequence it replays near an earlier point), so that the next
    /// evaluation is computed afresh and becomes the reference for the ones near it. The engine
    /// calls this once the search has found the optimum, before the final polish and the
    /// covariance. Default: nothing to forget.
    fn refresh(&mut self) {}

    /// The datasets as named index ranges into the residual vector, for the per-dataset
    /// residual checks and bootstrap resampling. Default: one dataset, `all`.
    fn datasets(&self) -> Vec<DatasetRange> {
        vec![DatasetRange {
            name: "all".to_string(),
            range: 0..self.n_residuals(),
        }]
    }

    /// The observations `y_i` and the σ_i (or scales) the residuals are divided by, in the
    /// residuals' order, when the model knows them (used only for the weighted R²).
    /// Default: not known.
    fn observations(&self) -> Option<(Vec<f64>, Vec<f64>)> {
        None
    }
}

/// A named slice of the residual vector belonging to one dataset.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct DatasetRange {
    /// Dataset name, as the user knows it.
    pub name: String,
    /// Indices of its residuals.
    pub range: std::ops::Range<usize>,
}

/// A [`ResidualProblem`] built from a closure `f(θ, out)`; convenient for simple models and
/// tests.
#[derive(Clone)]
pub struct FnProblem<F> {
    n: usize,
    f: F,
    datasets: Option<Vec<DatasetRange>>,
    observations: Option<(Vec<f64>, Vec<f64>)>,
}

impl<F> FnProblem<F>
where
    F: Fn(&[f64], &mut [f64]) -> Result<()> + Clone + Send,
{
    /// A problem with `n` residuals computed by `f`.
    pub fn new(n: usize, f: F) -> Self {
        FnProblem {
            n,
            f,
            datasets: None,
            observations: None,
        }
    }

    /// The same problem split into named datasets.
    pub fn with_datasets(mut self, datasets: Vec<DatasetRange>) -> Self {
        self.datasets = Some(datasets);
        self
    }

    /// The same problem with known observations `y` and their σ (for the weighted R²).
    pub fn with_observations(mut self, y: Vec<f64>, sigma: Vec<f64>) -> Self {
        self.observations = Some((y, sigma));
        self
    }
}

impl<F> ResidualProblem for FnProblem<F>
where
    F: Fn(&[f64], &mut [f64]) -> Result<()> + Clone + Send,
{
    fn n_residuals(&self) -> usize {
        self.n
    }

    fn residuals(&mut self, params: &[f64], out: &mut [f64]) -> Result<()> {
        (self.f)(params, out)
    }

    fn datasets(&self) -> Vec<DatasetRange> {
        match &self.datasets {
            Some(d) => d.clone(),
            None => vec![DatasetRange {
                name: "all".to_string(),
                range: 0..self.n,
            }],
        }
    }

    fn observations(&self) -> Option<(Vec<f64>, Vec<f64>)> {
        self.observations.clone()
    }
}

/// A problem whose residuals are shifted by a constant vector: `r*(θ) = r(θ) + shift`.
/// The residual bootstrap uses it with `shift = e* − r̂`.
#[derive(Clone)]
pub struct ShiftedProblem<P> {
    inner: P,
    shift: Vec<f64>,
}

impl<P: ResidualProblem> ShiftedProblem<P> {
    /// Wrap `inner`; `shift` must have `inner.n_residuals()` entries.
    pub fn new(inner: P, shift: Vec<f64>) -> Result<Self> {
        if shift.len() != inner.n_residuals() {
            return Err(Error::Internal(format!(
                "shift has {} entries for {} residuals",
                shift.len(),
                inner.n_residuals()
            )));
        }
        Ok(ShiftedProblem { inner, shift })
    }
}

impl<P: ResidualProblem> ResidualProblem for ShiftedProblem<P> {
    fn n_residuals(&self) -> usize {
        self.inner.n_residuals()
    }

    fn datasets(&self) -> Vec<DatasetRange> {
        self.inner.datasets()
    }

    fn residuals(&mut self, params: &[f64], out: &mut [f64]) -> Result<()> {
        self.inner.residuals(params, out)?;
        for (o, s) in out.iter_mut().zip(&self.shift) {
            *o += s;
        }
        Ok(())
    }

    fn refresh(&mut self) {
        self.inner.refresh();
    }

    fn inactive(&mut self, params: &[f64]) -> Result<Vec<bool>> {
        self.inner.inactive(params)
    }

    fn residuals_batch(
        &mut self,
        base: &[f64],
        points: &[Vec<f64>],
        outs: &mut [&mut [f64]],
    ) -> Vec<Result<()>> {
        let status = self.inner.residuals_batch(base, points, outs);
        for (out, st) in outs.iter_mut().zip(&status) {
            if st.is_ok() {
                for (o, s) in out.iter_mut().zip(&self.shift) {
                    *o += s;
                }
            }
        }
        status
    }
}

/// The engine's view of a problem: internal coordinates of the free parameters → residuals.
#[derive(Clone)]
pub struct Evaluator<P> {
    problem: P,
    params: ParamSet,
    full: Vec<f64>,
    n: usize,
    evaluations: usize,
    failures: usize,
    /// The last Jacobian formed: internal point, difference scheme and matrix.
    jacobian_cache: Option<(
        Vec<f64>,
        crate::fit::jacobian::Difference,
        std::sync::Arc<nalgebra::DMatrix<f64>>,
    )>,
}

impl<P: ResidualProblem> Evaluator<P> {
    /// Wrap `problem` with the parameter set `params`.
    pub fn new(problem: P, params: ParamSet) -> Self {
        let full = params.start_full();
        let n = problem.n_residuals();
        Evaluator {
            problem,
            params,
            full,
            n,
            evaluations: 0,
            failures: 0,
            jacobian_cache: None,
        }
    }

    /// Number of residuals.
    pub fn n_residuals(&self) -> usize {
        self.n
    }

    /// Number of free parameters.
    pub fn n_free(&self) -> usize {
        self.params.n_free()
    }

    /// The parameter set.
    pub fn params(&self) -> &ParamSet {
        &self.params
    }

    /// The wrapped problem.
    pub fn problem(&self) -> &P {
        &self.problem
    }

    /// Residual evaluations so far.
    pub fn evaluations(&self) -> usize {
        self.evaluations
    }

    /// Count evaluations made on a copy of this evaluator (a parallel search).
    pub(crate) fn add_counts(&mut self, evaluations: usize, failures: usize) {
        self.evaluations += evaluations;
        self.failures += failures;
    }

    /// Evaluations that failed or gave non-finite values.
    pub fn failures(&self) -> usize {
        self.failures
    }

    /// Full SI vector for internal coordinates `u`.
    pub fn external(&self, u: &[f64]) -> Vec<f64> {
        let mut full = self.full.clone();
        self.params.fill_external(u, &mut full);
        full
    }

    /// Residuals at internal coordinates `u` into `out`; `false` when the evaluation failed,
    /// a parameter maps to a non-finite value, or any residual is not finite.
    pub fn eval(&mut self, u: &[f64], out: &mut [f64]) -> bool {
        self.evaluations += 1;
        self.params.fill_external(u, &mut self.full);
        let ok = self.full.iter().all(|v| v.is_finite())
            && out.len() == self.n
            && self.problem.residuals(&self.full, out).is_ok()
            && out.iter().all(|v| v.is_finite());
        if !ok {
            self.failures += 1;
        }
        ok
    }

    /// Forget the problem's replay state and the cached Jacobian (see
    /// [`ResidualProblem::refresh`]).
    pub fn refresh(&mut self) {
        self.problem.refresh();
        self.jacobian_cache = None;
    }

    /// Residuals at several internal points `us` near `base` (see
    /// [`ResidualProblem::residuals_batch`]) into `outs`; one flag per point, `false` as in
    /// [`Evaluator::eval`].
    pub fn eval_batch(
        &mut self,
        base: &[f64],
        us: &[Vec<f64>],
        outs: &mut [&mut [f64]],
    ) -> Vec<bool> {
        self.evaluations += us.len();
        let mut full_base = self.full.clone();
        self.params.fill_external(base, &mut full_base);
        let points: Vec<Vec<f64>> = us
            .iter()
            .map(|u| {
                let mut f = self.full.clone();
                self.params.fill_external(u, &mut f);
                f
            })
            .collect();
        if outs.len() != us.len() || outs.iter().any(|o| o.len() != self.n) {
            self.failures += us.len();
            return vec![false; us.len()];
        }
        let status = if full_base.iter().all(|v| v.is_finite()) {
            self.problem.residuals_batch(&full_base, &points, outs)
        } else {
            points
                .iter()
                .map(|_| Err(Error::Internal("non-finite base point".into())))
                .collect()
        };
        let flags: Vec<bool> = status
            .iter()
            .zip(&points)
            .zip(outs.iter())
            .map(|((st, p), o)| {
                st.is_ok() && p.iter().all(|v| v.is_finite()) && o.iter().all(|v| v.is_finite())
            })
            .collect();
        self.failures += flags.iter().filter(|f| !**f).count();
        flags
    }

    /// The Jacobian last formed at exactly `u` with `scheme`, if any.
    pub(crate) fn cached_jacobian(
        &self,
        u: &[f64],
        scheme: crate::fit::jacobian::Difference,
    ) -> Option<std::sync::Arc<nalgebra::DMatrix<f64>>> {
        match &self.jacobian_cache {
            Some((at, s, j)) if *s == scheme && at.as_slice() == u => Some(j.clone()),
            _ => None,
        }
    }

    /// Remember the Jacobian formed at `u` with `scheme`.
    pub(crate) fn remember_jacobian(
        &mut self,
        u: &[f64],
        scheme: crate::fit::jacobian::Difference,
        jac: std::sync::Arc<nalgebra::DMatrix<f64>>,
    ) {
        self.jacobian_cache = Some((u.to_vec(), scheme, jac));
    }

    /// Drop the cached Jacobian.
    pub(crate) fn forget_jacobian(&mut self) {
        self.jacobian_cache = None;
    }

    /// Drop the cached Jacobian and hand back its storage when nothing else holds it, so
    /// that the next Jacobian is formed in it: a new n × p buffer per iteration would be
    /// fresh pages from the system each time at 10⁶ points.
    pub(crate) fn recycle_jacobian(&mut self) -> Vec<f64> {
        self.jacobian_cache
            .take()
            .and_then(|(_, _, j)| std::sync::Arc::try_unwrap(j).ok())
            .map_or_else(Vec::new, |m| m.data.into())
    }

    /// Which residuals at `u` are not observations (see [`ResidualProblem::inactive`]).
    pub fn inactive(&mut self, u: &[f64]) -> Result<Vec<bool>> {
        self.params.fill_external(u, &mut self.full);
        self.problem.inactive(&self.full)
    }

    /// Residual vector at `u`, or `None` (see [`Evaluator::eval`]).
    pub fn residuals(&mut self, u: &[f64]) -> Option<Vec<f64>> {
        let mut out = vec![0.0; self.n];
        self.eval(u, &mut out).then_some(out)
    }

    /// Sum of squares at `u`, `+∞` when the evaluation fails.
    pub fn sum_of_squares(&mut self, u: &[f64]) -> f64 {
        match self.residuals(u) {
            Some(r) => r.iter().map(|v| v * v).sum(),
            None => f64::INFINITY,
        }
    }
}
