//! From the file as written ([`super::schema`]) to a resolved, SI-only experiment: the
//! parameter table, and per dataset a model template, the solver request, the observations
//! and the map from solver outputs to predictions.
//!
//! Every physical number becomes either a constant in SI or the index of a parameter, so
//! [`Dataset::model_for`] fills a template from a parameter vector without parsing anything.

use std::borrow::Cow;
use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use super::floor::{self, BelowLimit, DetectionLimit, PointVectors};
use super::locate::SpanIndex;
use super::quantity::{self, Kind};
use super::schema::*;
use super::suggest;
use crate::data::{self, ColumnSpec, ProfileColumns, ProfileTime, ReadOptions, SensorColumns};
use crate::data::{SensorSpec, SeriesColumns, Warning};
use crate::error::{Error, InputKind, Location, Result};
use crate::model::{
    DiffusivityLaw, End, EndCondition, Geometry, Initial, Layer, Model, Shape, Signal, Sources,
};
use crate::solver::{GridOptions, Observable, Request, Solution, SolverOptions};
use crate::units::{Quantity, Unit};

/// One parameter of the fit, SI units.
#[derive(Debug, Clone, PartialEq)]
pub struct Parameter {
    /// Name as written; a per-dataset parameter is named `name[dataset]`.
    pub name: String,
    /// The parameter's name in the file (without the dataset suffix).
    pub base_name: String,
    /// The dataset it belongs to, for per-dataset parameters (index into
    /// [`Experiment::datasets`]).
    pub dataset: Option<usize>,
    /// Unit label of the start value as written, for reports.
    pub unit: String,
    /// `x_SI = unit_scale · x + unit_offset` for the reporting unit.
    pub unit_scale: f64,
    /// Offset of the reporting unit, SI.
    pub unit_offset: f64,
    /// What it measures.
    pub kind: Kind,
    /// Start value, SI. NaN while `start_given` is false and no automatic start has been
    /// filled in yet (see [`Experiment::pending_starts`]).
    pub start: f64,
    /// True when the experiment file gave the start value; false when it is to be derived
    /// from the data (`crate::analysis::starts`).
    pub start_given: bool,
    /// Lower bound, SI.
    pub lower: Option<f64>,
    /// Upper bound, SI.
    pub upper: Option<f64>,
    /// True when the fit adjusts it; false when held at `start`.
    pub free: bool,
    /// Fit log(p) instead of p (strictly positive quantities).
    pub log: bool,
    /// Key path of its definition, for messages.
    pub key: String,
}

impl Parameter {
    /// A positive value inside the bounds, for building models before a pending automatic
    /// start is known (the geometric or plain middle of the bounds, or 1).
    pub fn placeholder(&self) -> f64 {
        match (self.lower, self.upper) {
            (Some(lo), Some(hi)) if self.log && lo > 0.0 => (lo * hi).sqrt(),
            (Some(lo), Some(hi)) => 0.5 * (lo + hi),
            (Some(lo), None) if lo > 0.0 => lo * 10.0,
            (Some(lo), None) => lo + 1.0,
            (None, Some(hi)) if hi > 0.0 => hi / 10.0,
            (None, Some(hi)) => hi - 1.0,
            (None, None) => 1.0,
        }
    }

    /// An SI value in the reporting unit.
    pub fn to_unit(&self, si: f64) -> f64 {
        (si - self.unit_offset) / self.unit_scale
    }
}

/// How the residuals of a dataset are weighted.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Weighting {
    /// `sigma` are absolute standard uncertainties: residual r_i = (y_i − f_i) / σ_i.
    Absolute,
    /// `sigma` are known up to one factor per dataset, which the fit estimates from the scatter.
    Scaled,
    /// σ_i = fraction · |y_i| (already filled into `sigma`).
    Relative(f64),
}

/// Standard uncertainties σ_i of a dataset's observed values, SI: one value shared by every
/// reading (a constant `sigma`, or none given) is stored once, not once per reading (8 MB
/// saved at 10⁶ readings). Read σ_i as `sigma[i]`, or with [`Sigmas::iter`].
#[derive(Debug, Clone, PartialEq)]
pub enum Sigmas {
    /// All readings have the same standard uncertainty.
    Shared {
        /// σ of every reading, SI.
        value: f64,
        /// Number of readings.
        len: usize,
    },
    /// One per reading, in data order.
    Each(Vec<f64>),
}

impl Default for Sigmas {
    fn default() -> Self {
        Sigmas::Each(Vec::new())
    }
}

impl Sigmas {
    /// Number of readings.
    pub fn len(&self) -> usize {
        match self {
            Sigmas::Shared { len, .. } => *len,
            Sigmas::Each(v) => v.len(),
        }
    }

    /// True when there are no readings.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// σ_i of every reading, in data order.
    pub fn iter(&self) -> SigmaIter<'_> {
        match self {
            Sigmas::Shared { value, len } => SigmaIter::Shared(std::iter::repeat_n(value, *len)),
            Sigmas::Each(v) => SigmaIter::Each(v.iter()),
        }
    }

    /// One value per reading, as a vector.
    pub fn to_vec(&self) -> Vec<f64> {
        self.iter().copied().collect()
    }
}

impl std::ops::Index<usize> for Sigmas {
    type Output = f64;

    /// σ_i; panics when `i` is not below [`Sigmas::len`], as a slice does.
    fn index(&self, i: usize) -> &f64 {
        match self {
            Sigmas::Shared { value, len } => {
                assert!(i < *len, "reading {i} of {len}");
                value
            }
            Sigmas::Each(v) => &v[i],
        }
    }
}

/// Iterator over [`Sigmas`].
#[derive(Debug, Clone)]
pub enum SigmaIter<'a> {
    /// A shared value, repeated.
    Shared(std::iter::RepeatN<&'a f64>),
    /// One per reading.
    Each(std::slice::Iter<'a, f64>),
}

impl<'a> Iterator for SigmaIter<'a> {
    type Item = &'a f64;

    fn next(&mut self) -> Option<&'a f64> {
        match self {
            SigmaIter::Shared(it) => it.next(),
            SigmaIter::Each(it) => it.next(),
        }
    }

    fn size_hint(&self) -> (usize, Option<usize>) {
        match self {
            SigmaIter::Shared(it) => it.size_hint(),
            SigmaIter::Each(it) => it.size_hint(),
        }
    }
}

impl ExactSizeIterator for SigmaIter<'_> {}

impl<'a> IntoIterator for &'a Sigmas {
    type Item = &'a f64;
    type IntoIter = SigmaIter<'a>;

    fn into_iter(self) -> SigmaIter<'a> {
        self.iter()
    }
}

/// Fit options.
#[derive(Debug, Clone, PartialEq)]
pub struct FitOptions {
    /// Confidence level of the reported intervals (0 < level < 1). Default 0.95.
    pub interval_level: f64,
    /// Most iterations. Default 200.
    pub maximum_iterations: usize,
    /// Relative change of the weighted sum of squares that ends the fit. Default 1e-10.
    pub tolerance: f64,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            interval_level: 0.95,
            maximum_iterations: 200,
            tolerance: 1e-10,
        }
    }
}

/// A number in a model template: constant (SI) or parameter index.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Num {
    Const(f64),
    Param(usize),
}

impl Num {
    #[inline]
    fn get(self, p: &[f64]) -> f64 {
        match self {
            Num::Const(v) => v,
            // Indices are checked against the vector length in `model_for`.
            Num::Param(i) => p.get(i).copied().unwrap_or(f64::NAN),
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
enum SignalT {
    Const(Num),
    Table(Vec<(f64, f64)>),
    Periodic {
        mean: Num,
        amplitude: Num,
        period: Num,
        phase: Num,
    },
    /// A gas at pressure p over a face: u = S·p (Henry's law).
    Gas {
        pressure: Num,
        solubility: Num,
    },
}

impl SignalT {
    fn make(&self, p: &[f64]) -> Signal {
        match self {
            SignalT::Const(n) => Signal::Constant(n.get(p)),
            SignalT::Table(rows) => Signal::Table(rows.clone()),
            SignalT::Periodic {
                mean,
                amplitude,
                period,
                phase,
            } => Signal::Periodic {
                mean: mean.get(p),
                amplitude: amplitude.get(p),
                period: period.get(p),
                phase: phase.get(p),
            },
            SignalT::Gas {
                pressure,
                solubility,
            } => Signal::Constant(solubility.get(p) * pressure.get(p)),
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
enum EndT {
    Value(SignalT),
    Flux(SignalT),
    Transfer {
        coefficient: Num,
        partition: Num,
        outside: SignalT,
    },
    Sealed,
}

impl EndT {
    fn make(&self, p: &[f64]) -> EndCondition {
        match self {
            EndT::Value(s) => EndCondition::Value(s.make(p)),
            EndT::Flux(s) => EndCondition::Flux(s.make(p)),
            EndT::Transfer {
                coefficient,
                partition,
                outside,
            } => EndCondition::Transfer {
                coefficient: coefficient.get(p),
                partition: partition.get(p),
                outside: outside.make(p),
            },
            EndT::Sealed => EndCondition::Sealed,
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum LawT {
    Constant(Num),
    Exponential(Num, Num, Num),
    Linear(Num, Num, Num),
}

impl LawT {
    fn make(self, p: &[f64]) -> DiffusivityLaw {
        match self {
            LawT::Constant(d0) => DiffusivityLaw::constant(d0.get(p)),
            LawT::Exponential(d0, beta, u_ref) => DiffusivityLaw::Exponential {
                d0: d0.get(p),
                beta: beta.get(p),
                u_ref: u_ref.get(p),
            },
            LawT::Linear(d0, beta, u_ref) => DiffusivityLaw::Linear {
                d0: d0.get(p),
                beta: beta.get(p),
                u_ref: u_ref.get(p),
            },
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum ThicknessT {
    Direct(Num),
    /// outer radius − inner radius
    Between(Num, Num),
}

#[derive(Debug, Clone, PartialEq)]
struct LayerT {
    thickness: ThicknessT,
    law: LawT,
    partition: Num,
}

#[derive(Debug, Clone, PartialEq)]
enum InitialT {
    Uniform(Num),
    Table(Vec<(f64, f64)>),
}

#[derive(Debug, Clone, PartialEq)]
struct ModelT {
    shape: Shape,
    inner_radius: Num,
    layers: Vec<LayerT>,
    left: EndT,
    right: EndT,
    initial: InitialT,
    exchange_rate: Num,
    ambient: Num,
    reaction_rate: Num,
}

/// One run, resolved: how to build its model, what to ask the solver, what was measured.
#[derive(Debug, Clone, PartialEq)]
pub struct Dataset {
    /// Name as written.
    pub name: String,
    /// Data file, resolved relative to the experiment file.
    pub file: PathBuf,
    /// Data file as written in the experiment file.
    pub file_as_written: String,
    /// Key path of this dataset (`datasets[i]`).
    pub key: String,
    /// Times and observables for the solver.
    pub request: Request,
    /// Observed values, SI, in data order.
    pub observed: Vec<f64>,
    /// Standard uncertainty of each observed value, SI (see [`Dataset::weighting`]).
    pub sigma: Sigmas,
    /// How `sigma` is to be read.
    pub weighting: Weighting,
    /// Data-file line of each observed value (from 1), as `u32` (4 bytes per reading).
    pub lines: Vec<u32>,
    /// Position of each observed value, m, where the observable is a value at a position;
    /// empty when no observed value has one (a time series of an amount, an uptake or a
    /// flux), so `positions.get(i).copied().flatten()` reads it either way.
    pub positions: Vec<Option<f64>>,
    /// For each observed value: (observable index, time index) in the solver's [`Solution`],
    /// as `u32` pairs; empty when observed value i is observable 0 at time i for every i (a
    /// time series of one quantity), which costs nothing at 10⁶ points. Read it with
    /// [`Dataset::output_of`] or [`Dataset::outputs`].
    map: Vec<(u32, u32)>,
    /// Unit label of the measured value as written, for reports.
    pub value_unit: String,
    /// Warnings of the data loader.
    pub warnings: Vec<Warning>,
    /// The instrument's detection limit and the readings at or below it (`detection_limit`).
    pub detection_limit: Option<DetectionLimit>,
    template: ModelT,
    scale: Option<Num>,
    offset: Option<Num>,
    /// Start of the exposure t0 on the data's clock (`exposure_start`), s.
    exposure_start: Option<Num>,
    n_params: usize,
}

impl Dataset {
    /// Number of observed values.
    pub fn len(&self) -> usize {
        self.observed.len()
    }

    /// True when there are no observed values (never, after a successful load).
    pub fn is_empty(&self) -> bool {
        self.observed.is_empty()
    }

    fn check_len(&self, params: &[f64]) -> Result<()> {
        if params.len() != self.n_params {
            return Err(Error::setting(
                "parameters",
                format!(
                    "expected {} parameter values (one per entry of the parameter table), found {}",
                    self.n_params,
                    params.len()
                ),
            ));
        }
        Ok(())
    }

    /// The forward model of this run for a full parameter vector (every entry of
    /// [`Experiment::parameters`], SI, in table order). The model is validated; a parameter
    /// value that makes it meaningless (D ≤ 0, thickness ≤ 0) is an [`Error::Setting`].
    pub fn model_for(&self, params: &[f64]) -> Result<Model> {
        self.check_len(params)?;
        let t = &self.template;
        let inner = t.inner_radius.get(params);
        let layers = t
            .layers
            .iter()
            .map(|l| Layer {
                thickness: match l.thickness {
                    ThicknessT::Direct(n) => n.get(params),
                    ThicknessT::Between(outer, inner) => outer.get(params) - inner.get(params),
                },
                diffusivity: l.law.make(params),
                partition_to_next: l.partition.get(params),
            })
            .collect();
        let model = Model {
            geometry: Geometry {
                shape: t.shape,
                inner_radius: inner,
                layers,
            },
            left: t.left.make(params),
            right: t.right.make(params),
            initial: match &t.initial {
                InitialT::Uniform(n) => Initial::Uniform(n.get(params)),
                InitialT::Table(rows) => Initial::Table(rows.clone()),
            },
            sources: Sources {
                exchange_rate: t.exchange_rate.get(params),
                exchange_value: t.ambient.get(params),
                reaction_rate: t.reaction_rate.get(params),
            },
        };
        model.validate()?;
        Ok(model)
    }

    /// Predictions for the observed values from a solution of [`Dataset::request`]:
    /// `f_i = offset + scale · s(o_i, t_i)` (scale 1 and offset 0 when not given), into `out`
    /// (cleared first).
    pub fn predict_into(
        &self,
        params: &[f64],
        solution: &Solution,
        out: &mut Vec<f64>,
    ) -> Result<()> {
        out.clear();
        out.resize(self.n_outputs(), 0.0);
        self.predict_to(params, solution, out)
    }

    /// [`Dataset::predict_into`] into a slice with one entry per observed value.
    pub fn predict_to(&self, params: &[f64], solution: &Solution, out: &mut [f64]) -> Result<()> {
        self.check_len(params)?;
        if out.len() != self.n_outputs() {
            return Err(Error::Internal(format!(
                "{} predictions asked for dataset '{}' of {} values",
                out.len(),
                self.name,
                self.n_outputs()
            )));
        }
        let (scale, offset) = self.scale_and_offset(params);
        let n_times = self.request.times.len();
        for ((o, k), f) in self.outputs().zip(out.iter_mut()) {
            let s = solution.series(o);
            if s.len() != n_times {
                return Err(Error::Internal(format!(
                    "solution does not belong to the request of dataset '{}'",
                    self.name
                )));
            }
            let v = s
                .get(k)
                .copied()
                .ok_or_else(|| Error::Internal(format!("time index {k} outside the solution")))?;
            *f = offset + scale * v;
        }
        Ok(())
    }

    /// The parameter that is the diffusivity of this run (the constant D, or D0 of a
    /// concentration-dependent law) when the sample is a single layer whose D is a parameter.
    pub fn diffusivity_parameter(&self) -> Option<usize> {
        match self.template.layers.as_slice() {
            [layer] => match layer.law {
                LawT::Constant(Num::Param(i))
                | LawT::Exponential(Num::Param(i), _, _)
                | LawT::Linear(Num::Param(i), _, _) => Some(i),
                _ => None,
            },
            _ => None,
        }
    }

    /// The solubility coefficient S of a face of this run under a gas (`pressure` and
    /// `solubility`), the left end first: a constant (SI, value unit per Pa) or a parameter.
    pub fn gas_solubility(&self) -> Option<Term> {
        let of_signal = |s: &SignalT| match s {
            SignalT::Gas { solubility, .. } => Some(Term::from(*solubility)),
            _ => None,
        };
        [&self.template.left, &self.template.right]
            .into_iter()
            .find_map(|e| match e {
                EndT::Value(s) => of_signal(s),
                EndT::Transfer { outside, .. } => of_signal(outside),
                _ => None,
            })
    }

    /// The weighted residual `(y_i − f_i)/w` of observed value `i`: one-sided for a reading
    /// censored at the detection limit (zero while the prediction is at or below it; see
    /// [`super::floor`]).
    #[inline]
    pub fn residual(&self, i: usize, predicted: f64, weight: f64) -> f64 {
        let y = self.observed[i];
        match &self.detection_limit {
            Some(dl) => dl.residual(i, y, predicted, weight),
            None => (y - predicted) / weight,
        }
    }

    /// The parameter that scales this run's model output (`scale = "M_inf"`), if any.
    pub fn scale_parameter(&self) -> Option<usize> {
        match self.scale {
            Some(Num::Param(i)) => Some(i),
            _ => None,
        }
    }

    /// The parameter added to this run's model output (`offset = "m0"`), if any.
    pub fn offset_parameter(&self) -> Option<usize> {
        match self.offset {
            Some(Num::Param(i)) => Some(i),
            _ => None,
        }
    }

    /// The fixed scale and offset of this run's output (`f = offset + scale · s`) at `params`.
    pub fn scale_and_offset(&self, params: &[f64]) -> (f64, f64) {
        (
            self.scale.map_or(1.0, |n| n.get(params)),
            self.offset.map_or(0.0, |n| n.get(params)),
        )
    }

    /// The start of the exposure t0 on the data's clock at `params`, s (0 when the dataset
    /// gives no `exposure_start`).
    pub fn exposure_start(&self, params: &[f64]) -> f64 {
        self.exposure_start.map_or(0.0, |n| n.get(params))
    }

    /// The parameter that is this run's exposure start (`exposure_start = "t0"`), if any.
    pub fn exposure_start_parameter(&self) -> Option<usize> {
        match self.exposure_start {
            Some(Num::Param(i)) => Some(i),
            _ => None,
        }
    }

    /// The solver request of this run at `params`: the data times on the model's clock,
    /// `τ_k = max(0, t_k − t0)` with t0 the exposure start, so that a point taken before the
    /// exposure began sees the initial state. Without `exposure_start` this is
    /// [`Dataset::request`] itself (borrowed).
    pub fn request_for(&self, params: &[f64]) -> Cow<'_, Request> {
        if self.exposure_start.is_none() {
            return Cow::Borrowed(&self.request);
        }
        let t0 = self.exposure_start(params);
        Cow::Owned(Request {
            times: self
                .request
                .times
                .iter()
                .map(|&t| (t - t0).max(0.0))
                .collect(),
            observables: self.request.observables.clone(),
        })
    }

    /// A step sequence for [`crate::solver::StepPlan::Replay`] at `params`, made from the
    /// sequence `schedule` of a solve of [`Dataset::request_for`] at `base`.
    ///
    /// When only the exposure start moved (t0 → t0 − δ, so every model time τ_k > 0 moves to
    /// τ_k + δ), the steps are carried along by the map
    ///
    /// ```text
    ///   s ↦ s (τ₁ + δ)/τ₁     for s ≤ τ₁   (τ₁ the first model time after 0)
    ///   s ↦ s + δ             for s > τ₁
    /// ```
    ///
    /// which is continuous, sends every output time to its new value (exactly: output times
    /// are looked up, not recomputed) and moves each step smoothly with t0. A finite-difference
    /// derivative with respect to t0 therefore sees a smooth function rather than the jumps of
    /// a new adaptive step sequence. `None` when the map does not apply: a point crosses the
    /// start of the exposure, or τ₁ changes by more than 10 % (then solve afresh).
    pub fn replay_schedule<'s>(
        &self,
        base: &[f64],
        schedule: &'s [f64],
        params: &[f64],
    ) -> Option<Cow<'s, [f64]>> {
        let (t0_base, t0) = (self.exposure_start(base), self.exposure_start(params));
        if t0_base == t0 {
            return Some(Cow::Borrowed(schedule));
        }
        // (old, new) model times of the points after the start, sorted and unique.
        let mut pairs = Vec::with_capacity(self.request.times.len());
        for &t in &self.request.times {
            let (old, new) = ((t - t0_base).max(0.0), (t - t0).max(0.0));
            if (old > 0.0) != (new > 0.0) {
                return None;
            }
            if old > 0.0 {
                pairs.push((old, new));
            }
        }
        pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
        pairs.dedup_by(|a, b| a.0 == b.0);
        if pairs.windows(2).any(|w| w[1].1 <= w[0].1) {
            return None;
        }
        let &(first_old, first_new) = pairs.first()?;
        let ratio = first_new / first_old;
        if !(0.9..=1.1).contains(&ratio) {
            return None;
        }
        let shift = t0_base - t0;
        let mut out = Vec::with_capacity(schedule.len());
        for &s in schedule {
            let mapped = match pairs.binary_search_by(|p| p.0.total_cmp(&s)) {
                Ok(k) => pairs[k].1,
                Err(_) if s < first_old => s * ratio,
                Err(_) => s + shift,
            };
            if out.last().is_some_and(|&prev| mapped <= prev) || !mapped.is_finite() {
                return None;
            }
            out.push(mapped);
        }
        Some(Cow::Owned(out))
    }

    /// The sample's extent (left and right coordinate, m) when it does not depend on
    /// parameters: (0, L) for a slab, (inner radius, outer radius) for a cylinder or sphere.
    pub fn sample_extent(&self) -> Option<(f64, f64)> {
        const_extent(&self.template)
    }

    /// Indices of every parameter this run's model or prediction uses, sorted, each once.
    pub fn parameters_used(&self) -> Vec<usize> {
        let t = &self.template;
        let mut nums = vec![t.inner_radius, t.exchange_rate, t.ambient, t.reaction_rate];
        for l in &t.layers {
            match l.thickness {
                ThicknessT::Direct(n) => nums.push(n),
                ThicknessT::Between(a, b) => nums.extend([a, b]),
            }
            match l.law {
                LawT::Constant(n) => nums.push(n),
                LawT::Exponential(a, b, c) | LawT::Linear(a, b, c) => nums.extend([a, b, c]),
            }
            nums.push(l.partition);
        }
        let signal = |s: &SignalT, nums: &mut Vec<Num>| match s {
            SignalT::Const(n) => nums.push(*n),
            SignalT::Table(_) => {}
            SignalT::Periodic {
                mean,
                amplitude,
                period,
                phase,
            } => nums.extend([*mean, *amplitude, *period, *phase]),
            SignalT::Gas {
                pressure,
                solubility,
            } => nums.extend([*pressure, *solubility]),
        };
        for e in [&t.left, &t.right] {
            match e {
                EndT::Value(s) | EndT::Flux(s) => signal(s, &mut nums),
                EndT::Transfer {
                    coefficient,
                    partition,
                    outside,
                } => {
                    nums.extend([*coefficient, *partition]);
                    signal(outside, &mut nums);
                }
                EndT::Sealed => {}
            }
        }
        if let InitialT::Uniform(n) = t.initial {
            nums.push(n);
        }
        nums.extend(self.scale);
        nums.extend(self.offset);
        nums.extend(self.exposure_start);
        let mut out: Vec<usize> = nums
            .into_iter()
            .filter_map(|n| match n {
                Num::Param(i) => Some(i),
                Num::Const(_) => None,
            })
            .collect();
        out.sort_unstable();
        out.dedup();
        out
    }

    /// (observable index, time index) of observed value `i` in the solver's [`Solution`].
    pub fn output_of(&self, i: usize) -> (usize, usize) {
        match self.map.get(i) {
            Some(&(o, k)) => (o as usize, k as usize),
            None => (0, i),
        }
    }

    /// [`Dataset::output_of`] for every observed value, in data order.
    pub fn outputs(&self) -> impl ExactSizeIterator<Item = (usize, usize)> + Clone + '_ {
        (0..self.n_outputs()).map(|i| self.output_of(i))
    }

    /// Number of predicted values: one per observed value (or per entry of the output map of
    /// a [`Dataset::resampled`] copy, which has no observations).
    fn n_outputs(&self) -> usize {
        if self.map.is_empty() {
            self.observed.len()
        } else {
            self.map.len()
        }
    }

    /// Whether observed value i is the solver's observable 0 at requested time i, for every i:
    /// then the solver's values ([`crate::solver::Solver::solve_into`]) are the predictions
    /// before scale and offset, in data order.
    pub fn reads_in_order(&self) -> bool {
        self.map.is_empty()
            && self.request.observables.len() == 1
            && self.request.times.len() == self.observed.len()
    }

    /// [`Dataset::predict_to`] in place, for a dataset that [`Dataset::reads_in_order`]:
    /// `values` holds the solver's values in data order and becomes the predictions
    /// `offset + scale × value`.
    pub fn predict_in_place(&self, params: &[f64], values: &mut [f64]) -> Result<()> {
        self.check_len(params)?;
        if !self.reads_in_order() || values.len() != self.len() {
            return Err(Error::Internal(format!(
                "{} values given for dataset '{}' of {} values in order",
                values.len(),
                self.name,
                self.len()
            )));
        }
        let (scale, offset) = self.scale_and_offset(params);
        for v in values.iter_mut() {
            *v = offset + scale * *v;
        }
        Ok(())
    }

    /// [`Dataset::predict_into`] into a new vector.
    pub fn predict(&self, params: &[f64], solution: &Solution) -> Result<Vec<f64>> {
        let mut out = Vec::with_capacity(self.n_outputs());
        self.predict_into(params, solution, &mut out)?;
        Ok(out)
    }

    /// The same run asked for other outputs (`request` on the data's clock, `map` into its
    /// solution), with no observations: for model curves on a grid of its own. The data
    /// vectors are not copied.
    pub fn resampled(&self, request: Request, map: Vec<(u32, u32)>) -> Dataset {
        Dataset {
            name: self.name.clone(),
            file: self.file.clone(),
            file_as_written: self.file_as_written.clone(),
            key: self.key.clone(),
            request,
            observed: Vec::new(),
            sigma: Sigmas::default(),
            weighting: self.weighting,
            lines: Vec::new(),
            positions: Vec::new(),
            map,
            value_unit: self.value_unit.clone(),
            warnings: Vec::new(),
            detection_limit: None,
            template: self.template.clone(),
            scale: self.scale,
            offset: self.offset,
            exposure_start: self.exposure_start,
            n_params: self.n_params,
        }
    }
}

/// A number of a model: a constant (SI) or a parameter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Term {
    /// A constant, SI.
    Constant(f64),
    /// A parameter: index into [`Experiment::parameters`].
    Parameter(usize),
}

impl Term {
    /// Its value for a full SI parameter vector (NaN for an index outside it).
    pub fn value(self, params: &[f64]) -> f64 {
        match self {
            Term::Constant(v) => v,
            Term::Parameter(i) => params.get(i).copied().unwrap_or(f64::NAN),
        }
    }
}

impl From<Num> for Term {
    fn from(n: Num) -> Term {
        match n {
            Num::Const(v) => Term::Constant(v),
            Num::Param(i) => Term::Parameter(i),
        }
    }
}

/// A resolved experiment, SI units throughout.
#[derive(Debug, Clone, PartialEq)]
pub struct Experiment {
    /// The experiment file as named by the caller.
    pub file: PathBuf,
    /// Title, when given.
    pub title: Option<String>,
    /// The sample's value unit as written (K, degC, mol/m3...).
    pub value_unit: String,
    /// Every parameter (free and fixed), in order of first use.
    pub parameters: Vec<Parameter>,
    /// The runs, in file order. Shared between copies of the experiment (a copy with other
    /// start values or another thickness does not copy the data, which can be 10⁶ points).
    pub datasets: Arc<Vec<Dataset>>,
    /// Solver options.
    pub solver: SolverOptions,
    /// Fit options.
    pub fit: FitOptions,
    /// Quantities to derive from the fit (`[derived]`).
    pub derived: Vec<DerivedRequest>,
    /// Temperature of the run, K (`temperature`), for Arrhenius analyses.
    pub temperature: Option<f64>,
}

/// A quantity to derive from the fitted parameters (`[derived.NAME]`), SI.
#[derive(Debug, Clone, PartialEq)]
pub struct DerivedRequest {
    /// The table's name.
    pub name: String,
    /// What to compute.
    pub what: DerivedWhat,
}

/// ρ (kg/m³) and c_p (J/(kg K)), each as (value, standard uncertainty).
pub type HeatInputs = ((f64, f64), (f64, f64));

/// The derived quantities.
#[derive(Debug, Clone, PartialEq)]
pub enum DerivedWhat {
    /// k = α ρ c_p, W/(m K).
    Conductivity {
        /// Index of the diffusivity parameter α.
        diffusivity: usize,
        /// ρ, kg/m³, and its standard uncertainty.
        density: (f64, f64),
        /// c_p, J/(kg K), and its standard uncertainty.
        heat_capacity: (f64, f64),
    },
    /// Time, s, at which a run's fractional uptake first reaches `fraction`.
    EquilibriumTime {
        /// Index of the dataset.
        dataset: usize,
        /// Fraction of the equilibrium change, 0 < f < 1.
        fraction: f64,
    },
    /// Flux in through an end of a run at the given times (s), in value unit · m/s (SI).
    FluxIn {
        /// Index of the dataset.
        dataset: usize,
        /// The end.
        end: End,
        /// Times, s.
        times: Vec<f64>,
        /// ρ (kg/m³) and c_p (J/(kg K)), each with its standard uncertainty, to report a
        /// temperature flux as a heat flux ρ c_p J in W/m².
        heat: Option<HeatInputs>,
    },
    /// Permeability P = D S, in value unit · m²/(s Pa) (mol/(m s Pa) for u in mol/m³).
    Permeability {
        /// Index of the diffusivity parameter D.
        diffusivity: usize,
        /// The solubility coefficient S, value unit per Pa.
        solubility: Term,
    },
    /// Time lag θ = L²/(6D) of a run's membrane (a single-layer slab with constant D), s.
    TimeLag {
        /// Index of the dataset.
        dataset: usize,
    },
}

impl Experiment {
    /// True when the sample's values are temperatures (a heat-conduction problem).
    pub fn value_unit_is_temperature(&self) -> bool {
        quantity::value_unit(&self.value_unit).quantity() == crate::units::Quantity::Temperature
    }

    /// Start values of every parameter, SI (NaN for a pending automatic start).
    pub fn start_values(&self) -> Vec<f64> {
        self.parameters.iter().map(|p| p.start).collect()
    }

    /// Indices of the parameters whose start is still to be derived from the data.
    pub fn pending_starts(&self) -> Vec<usize> {
        (0..self.parameters.len())
            .filter(|&i| !self.parameters[i].start.is_finite())
            .collect()
    }

    /// Index of a parameter by its full name (`D`, `M_inf[sorption]`).
    pub fn parameter_index(&self, name: &str) -> Option<usize> {
        self.parameters.iter().position(|p| p.name == name)
    }

    /// Number of free parameters.
    pub fn free_count(&self) -> usize {
        self.parameters.iter().filter(|p| p.free).count()
    }

    /// Number of observed values over all datasets.
    pub fn point_count(&self) -> usize {
        self.datasets.iter().map(Dataset::len).sum()
    }
}

/// Which numbers must be positive.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Check {
    Any,
    Positive,
    NonNegative,
}

struct Builder<'a> {
    index: &'a SpanIndex,
    base: PathBuf,
    value_unit: Unit,
    specs: &'a BTreeMap<String, ParameterSpec>,
    params: Vec<Parameter>,
    /// (name, dataset or None) → index in params.
    lookup: BTreeMap<(String, Option<usize>), usize>,
    dataset: Option<(usize, &'a DatasetSpec)>,
}

fn input(b: &Builder<'_>, kind: InputKind, key: &str, msg: impl Into<String>) -> Error {
    Error::input(kind, b.index.location(key), msg)
}

impl<'a> Builder<'a> {
    fn err(&self, kind: InputKind, key: &str, msg: impl Into<String>) -> Error {
        input(self, kind, key, msg)
    }

    /// A literal (never a parameter) of a kind, SI.
    fn literal(
        &self,
        s: &Scalar,
        kind: Kind,
        check: Check,
        key: &str,
    ) -> Result<(f64, quantity::Conversion)> {
        let (number, unit) = match s {
            Scalar::Number(x) => (*x, None),
            Scalar::Text(t) => {
                if !quantity::looks_numeric(t) {
                    return Err(self.err(
                        InputKind::BadValue,
                        key,
                        format!("expected a number with unit for '{key}', found '{t}'"),
                    ));
                }
                let w = quantity::split_number(t).ok_or_else(|| {
                    self.err(
                        InputKind::BadValue,
                        key,
                        format!("'{t}' is not a finite number with unit (for '{key}')"),
                    )
                })?;
                (w.number, w.unit)
            }
        };
        if !number.is_finite() {
            return Err(self.err(
                InputKind::NotFinite,
                key,
                format!("'{key}' must be finite, found {number}"),
            ));
        }
        let conv = quantity::conversion(kind, unit.as_deref(), &self.value_unit).map_err(|m| {
            self.err(
                InputKind::UnknownUnit,
                key,
                format!("{m} (key '{key}', a {})", kind.name()),
            )
        })?;
        let v = conv.to_si(number);
        if !v.is_finite() {
            return Err(self.err(
                InputKind::NotFinite,
                key,
                format!(
                    "'{key}' overflows when converted to SI units; check the number and its unit"
                ),
            ));
        }
        self.check(v, check, kind, key, s)?;
        Ok((v, conv))
    }

    fn check(&self, v: f64, check: Check, kind: Kind, key: &str, s: &Scalar) -> Result<()> {
        let written = match s {
            Scalar::Number(x) => x.to_string(),
            Scalar::Text(t) => format!("'{t}'"),
        };
        let bad = match check {
            Check::Any => false,
            Check::Positive => v <= 0.0,
            Check::NonNegative => v < 0.0,
        };
        if bad {
            let want = if check == Check::Positive {
                "positive"
            } else {
                "zero or positive"
            };
            return Err(self.err(
                InputKind::BadValue,
                key,
                format!("'{key}' must be a {want} {}, found {written}", kind.name()),
            ));
        }
        Ok(())
    }

    /// A number that may be a parameter name.
    fn num(&mut self, s: &Scalar, kind: Kind, check: Check, key: &str) -> Result<Num> {
        if let Scalar::Text(t) = s {
            let t = t.trim();
            if !quantity::looks_numeric(t) {
                if !quantity::is_name(t) {
                    return Err(self.err(
                        InputKind::BadValue,
                        key,
                        format!("expected a number with unit or a parameter name for '{key}', found '{t}'"),
                    ));
                }
                return self.param(t, kind, check, key).map(Num::Param);
            }
        }
        self.literal(s, kind, check, key)
            .map(|(v, _)| Num::Const(v))
    }

    fn opt_num(
        &mut self,
        s: Option<&Scalar>,
        default: f64,
        kind: Kind,
        check: Check,
        key: &str,
    ) -> Result<Num> {
        match s {
            Some(s) => self.num(s, kind, check, key),
            None => Ok(Num::Const(default)),
        }
    }

    /// The index of a parameter used at `key` as a `kind`, defining it on first use.
    fn param(&mut self, name: &str, kind: Kind, check: Check, key: &str) -> Result<usize> {
        let Some(spec) = self.specs.get(name) else {
            let hint = suggest::did_you_mean(name, self.specs.keys().map(String::as_str));
            let known = if self.specs.is_empty() {
                "no parameters are defined".to_string()
            } else {
                format!(
                    "defined: {}",
                    self.specs.keys().cloned().collect::<Vec<_>>().join(", ")
                )
            };
            return Err(self.err(
                InputKind::UndefinedParameter,
                key,
                format!("'{key}' refers to parameter '{name}', which is not defined under [parameters]{hint}; {known}"),
            ));
        };
        let ds = if spec.per_dataset {
            self.dataset.map(|d| d.0)
        } else {
            None
        };
        if spec.per_dataset && ds.is_none() {
            return Err(self.err(
                InputKind::BadValue,
                key,
                format!("per-dataset parameter '{name}' used outside any dataset"),
            ));
        }
        if let Some(&i) = self.lookup.get(&(name.to_string(), ds)) {
            let p = &self.params[i];
            if p.kind != kind {
                return Err(self.err(
                    InputKind::BadValue,
                    key,
                    format!(
                        "parameter '{name}' is used here as a {} but elsewhere as a {}; use two parameters",
                        kind.name(),
                        p.kind.name()
                    ),
                ));
            }
            return Ok(i);
        }
        let pkey = format!("parameters.{name}");
        // A per-dataset start value may be given in the dataset.
        let (start_scalar, start_key) = match self.dataset {
            Some((i, d)) if spec.per_dataset => match d.starts.as_ref().and_then(|s| s.get(name)) {
                Some(s) => (Some(s), format!("datasets[{i}].starts.{name}")),
                None => (spec.start.as_ref(), format!("{pkey}.start")),
            },
            _ => (spec.start.as_ref(), format!("{pkey}.start")),
        };
        if let Some(Scalar::Text(t)) = start_scalar {
            if !quantity::looks_numeric(t) {
                let what = if t.trim() == name {
                    format!("parameter '{name}' is defined from itself")
                } else {
                    format!("the start of '{name}' refers to '{}'; parameters cannot be defined from other parameters", t.trim())
                };
                return Err(self.err(
                    InputKind::BadValue,
                    &start_key,
                    format!(
                        "{what}: give a number with unit, such as \"{}\", or leave `start` out to have it derived from the data",
                        example(kind)
                    ),
                ));
            }
        }
        let lower = match &spec.lower {
            Some(s) => Some(self.literal(s, kind, Check::Any, &format!("{pkey}.lower"))?),
            None => None,
        };
        let upper = match &spec.upper {
            Some(s) => Some(self.literal(s, kind, Check::Any, &format!("{pkey}.upper"))?),
            None => None,
        };
        let (start, conv) = match start_scalar {
            Some(sc) => self.literal(sc, kind, check, &start_key)?,
            None => {
                // The reporting unit: `unit`, else that of a bound, else SI.
                let conv = match &spec.unit {
                    Some(u) => quantity::conversion(kind, Some(u.as_str()), &self.value_unit)
                        .map_err(|m| {
                            self.err(
                                InputKind::UnknownUnit,
                                &format!("{pkey}.unit"),
                                format!("{m} (key '{pkey}.unit', a {})", kind.name()),
                            )
                        })?,
                    None => match (&lower, &upper) {
                        (Some((_, c)), _) | (None, Some((_, c))) => c.clone(),
                        (None, None) => quantity::conversion(kind, None, &self.value_unit)
                            .map_err(|m| self.err(InputKind::UnknownUnit, &pkey, m))?,
                    },
                };
                (f64::NAN, conv)
            }
        };
        let start_given = start_scalar.is_some();
        let lower = lower.map(|l| l.0);
        let upper = upper.map(|u| u.0);
        if let (Some(lo), Some(hi)) = (lower, upper) {
            if lo >= hi {
                return Err(self.err(
                    InputKind::BadBounds,
                    &format!("{pkey}.lower"),
                    format!("parameter '{name}': lower bound {lo:e} must be below the upper bound {hi:e} (SI)"),
                ));
            }
        }
        if lower.is_some_and(|lo| start < lo) || upper.is_some_and(|hi| start > hi) {
            return Err(self.err(
                InputKind::BadBounds,
                &start_key,
                format!(
                    "parameter '{name}': start value {start:e} lies outside its bounds [{}, {}] (SI)",
                    lower.map_or("-inf".into(), |v| format!("{v:e}")),
                    upper.map_or("inf".into(), |v| format!("{v:e}")),
                ),
            ));
        }
        if !start_given && spec.fixed {
            return Err(self.err(
                InputKind::BadValue,
                &format!("{pkey}.fixed"),
                format!("parameter '{name}' is fixed but has no `start`: give the value it is held at as `start`"),
            ));
        }
        // A missing start counts as positive for the transform rules: automatic starts of a
        // log-scale parameter are positive.
        let start_positive = !start_given || start > 0.0;
        let log = match spec.transform {
            Some(TransformName::Log) => {
                if !start_positive || lower.is_some_and(|lo| lo <= 0.0) {
                    return Err(self.err(
                        InputKind::BadBounds,
                        &format!("{pkey}.transform"),
                        format!("parameter '{name}': a log transform needs a positive start value and lower bound"),
                    ));
                }
                true
            }
            Some(TransformName::None) => false,
            None => {
                matches!(kind, Kind::Diffusivity | Kind::Rate | Kind::Speed)
                    && start_positive
                    && lower.is_none_or(|lo| lo > 0.0)
            }
        };
        let full = match ds.and(self.dataset) {
            Some((_, d)) => format!("{name}[{}]", d.name),
            None => name.to_string(),
        };
        let label = if conv.label.is_empty() {
            kind.bare_unit(&self.value_unit)
        } else {
            conv.label.clone()
        };
        self.params.push(Parameter {
            name: full,
            base_name: name.to_string(),
            dataset: ds,
            unit: label,
            unit_scale: conv.scale,
            unit_offset: conv.offset,
            kind,
            start,
            start_given,
            lower,
            upper,
            free: !spec.fixed,
            log,
            key: pkey,
        });
        let i = self.params.len() - 1;
        self.lookup.insert((name.to_string(), ds), i);
        Ok(i)
    }

    fn resolve_path(&self, written: &str, key: &str) -> Result<PathBuf> {
        let resolved = self.base.join(written);
        if resolved.is_dir() {
            return Err(self.err(
                InputKind::Unreadable,
                key,
                format!(
                    "data file '{written}' (as written), resolved to '{}', is a folder; name \
                     the CSV file inside it",
                    resolved.display()
                ),
            ));
        }
        if let Err(e) = std::fs::File::open(&resolved) {
            return Err(self.err(
                InputKind::Unreadable,
                key,
                format!(
                    "cannot read data file '{written}' (as written), resolved to '{}': {e}",
                    resolved.display()
                ),
            ));
        }
        Ok(resolved)
    }

    fn signal(&mut self, s: &SignalSpec, kind: Kind, key: &str) -> Result<SignalT> {
        let t = match s {
            SignalSpec::Scalar(sc) => {
                return self.num(sc, kind, Check::Any, key).map(SignalT::Const)
            }
            SignalSpec::Table(t) => &**t,
        };
        let has_rows = t.rows.is_some();
        let has_periodic =
            t.mean.is_some() || t.amplitude.is_some() || t.period.is_some() || t.phase.is_some();
        let has_file = t.file.is_some();
        let has_gas = t.pressure.is_some() || t.solubility.is_some();
        if usize::from(has_rows)
            + usize::from(has_periodic)
            + usize::from(has_file)
            + usize::from(has_gas)
            != 1
        {
            return Err(self.err(
                InputKind::BadValue,
                key,
                format!("'{key}' must give exactly one of: rows (a time table), mean/amplitude/period (a periodic signal), file (a data column), pressure/solubility (a gas over the face)"),
            ));
        }
        if has_gas {
            return self.gas(t, kind, key);
        }
        if let Some(rows) = &t.rows {
            let tu = t.time_unit.as_deref().ok_or_else(|| {
                self.err(
                    InputKind::MissingKey,
                    &format!("{key}.time_unit"),
                    format!("'{key}.rows' needs 'time_unit' (s, min, h or d)"),
                )
            })?;
            let tc = quantity::conversion(Kind::Time, Some(tu), &self.value_unit)
                .map_err(|m| self.err(InputKind::UnknownUnit, &format!("{key}.time_unit"), m))?;
            let vc = quantity::conversion(kind, t.value_unit.as_deref(), &self.value_unit)
                .map_err(|m| self.err(InputKind::UnknownUnit, &format!("{key}.value_unit"), m))?;
            let rows: Vec<(f64, f64)> = rows
                .iter()
                .map(|r| (tc.to_si(r[0]), vc.to_si(r[1])))
                .collect();
            check_rows(self, &rows, &format!("{key}.rows"), "times")?;
            return Ok(SignalT::Table(rows));
        }
        if has_periodic {
            for (k, v) in [
                ("mean", &t.mean),
                ("amplitude", &t.amplitude),
                ("period", &t.period),
            ] {
                if v.is_none() {
                    return Err(self.err(
                        InputKind::MissingKey,
                        &format!("{key}.{k}"),
                        format!("a periodic signal needs '{k}'"),
                    ));
                }
            }
            let diff = if kind == Kind::Value {
                Kind::ValueDifference
            } else {
                kind
            };
            let z = Scalar::Number(0.0);
            return Ok(SignalT::Periodic {
                mean: self.num(
                    t.mean.as_ref().unwrap_or(&z),
                    kind,
                    Check::Any,
                    &format!("{key}.mean"),
                )?,
                amplitude: self.num(
                    t.amplitude.as_ref().unwrap_or(&z),
                    diff,
                    Check::Any,
                    &format!("{key}.amplitude"),
                )?,
                period: self.num(
                    t.period.as_ref().unwrap_or(&z),
                    Kind::Time,
                    Check::Positive,
                    &format!("{key}.period"),
                )?,
                phase: self.opt_num(
                    t.phase.as_ref(),
                    0.0,
                    Kind::Angle,
                    Check::Any,
                    &format!("{key}.phase"),
                )?,
            });
        }
        // A column of a data file.
        let written = t.file.clone().unwrap_or_default();
        let path = self.resolve_path(&written, &format!("{key}.file"))?;
        let time_col = t.time_column.as_deref().ok_or_else(|| {
            self.err(
                InputKind::MissingKey,
                &format!("{key}.time_column"),
                "a signal from a file needs 'time_column'",
            )
        })?;
        let value_col = t.value_column.as_deref().ok_or_else(|| {
            self.err(
                InputKind::MissingKey,
                &format!("{key}.value_column"),
                "a signal from a file needs 'value_column'",
            )
        })?;
        let origin = match &t.time_origin {
            Some(s) => Some(
                self.literal(s, Kind::Time, Check::Any, &format!("{key}.time_origin"))?
                    .0,
            ),
            None => None,
        };
        let mut cols = SeriesColumns::new(time_col, value_col);
        if kind == Kind::Value && self.value_unit.quantity() == Quantity::Arbitrary {
            cols.value = ColumnSpec::new(value_col).with_unit(self.value_unit.clone());
        }
        let opts = ReadOptions {
            time_origin: origin,
            min_points: 1,
            ..Default::default()
        };
        let loaded = data::read_time_series(&path, &cols, &opts)?;
        let series = loaded.data.into_iter().next().ok_or_else(|| {
            self.err(
                InputKind::Empty,
                &format!("{key}.file"),
                format!("'{written}' holds no rows"),
            )
        })?;
        if kind == Kind::Value
            && self.value_unit.quantity() != Quantity::Arbitrary
            && series.value_unit.quantity() != self.value_unit.quantity()
        {
            return Err(self.err(
                InputKind::UnknownUnit,
                &format!("{key}.value_column"),
                format!(
                    "column '{}' of '{written}' is in '{}', but the sample's values are a {}",
                    series.value_column,
                    series.value_unit.label(),
                    self.value_unit.quantity()
                ),
            ));
        }
        Ok(SignalT::Table(
            series.time.into_iter().zip(series.value).collect(),
        ))
    }

    /// `{ pressure, solubility }`: the value just inside a face under a gas, u = S·p.
    fn gas(&mut self, t: &SignalTable, kind: Kind, key: &str) -> Result<SignalT> {
        if kind != Kind::Value {
            return Err(self.err(
                InputKind::BadValue,
                key,
                format!("'{key}' is a {}, but pressure and solubility give a value (S·p); use them under 'value' or a transfer's 'outside'", kind.name()),
            ));
        }
        let (Some(p), Some(sol)) = (&t.pressure, &t.solubility) else {
            let missing = if t.pressure.is_none() {
                "pressure"
            } else {
                "solubility"
            };
            return Err(self.err(
                InputKind::MissingKey,
                &format!("{key}.{missing}"),
                "a gas over the face needs both 'pressure' (such as \"2 bar\") and 'solubility' (a number with unit such as \"0.5 mol/m3/bar\", or a parameter name)",
            ));
        };
        Ok(SignalT::Gas {
            pressure: self.num(
                p,
                Kind::Pressure,
                Check::Positive,
                &format!("{key}.pressure"),
            )?,
            solubility: self.num(
                sol,
                Kind::Solubility,
                Check::Positive,
                &format!("{key}.solubility"),
            )?,
        })
    }

    fn end(&mut self, e: &EndSpec, key: &str, centre: bool) -> Result<EndT> {
        let count = usize::from(e.value.is_some())
            + usize::from(e.flux.is_some())
            + usize::from(e.transfer.is_some())
            + usize::from(e.sealed.is_some());
        if count != 1 {
            let kind = if count == 0 {
                InputKind::MissingKey
            } else {
                InputKind::BadValue
            };
            return Err(self.err(
                kind,
                key,
                format!("'{key}' must give exactly one of: value, flux, transfer, sealed"),
            ));
        }
        let end = if let Some(v) = &e.value {
            EndT::Value(self.signal(v, Kind::Value, &format!("{key}.value"))?)
        } else if let Some(f) = &e.flux {
            EndT::Flux(self.signal(f, Kind::Flux, &format!("{key}.flux"))?)
        } else if let Some(t) = &e.transfer {
            let k = format!("{key}.transfer");
            EndT::Transfer {
                coefficient: self.num(
                    &t.coefficient,
                    Kind::Speed,
                    Check::Positive,
                    &format!("{k}.coefficient"),
                )?,
                partition: self.opt_num(
                    t.partition.as_ref(),
                    1.0,
                    Kind::Dimensionless,
                    Check::Positive,
                    &format!("{k}.partition"),
                )?,
                outside: self.signal(&t.outside, Kind::Value, &format!("{k}.outside"))?,
            }
        } else if e.sealed == Some(true) {
            EndT::Sealed
        } else {
            return Err(self.err(
                InputKind::BadValue,
                &format!("{key}.sealed"),
                "'sealed = false' says nothing; give value, flux or transfer instead",
            ));
        };
        if centre && end != EndT::Sealed {
            return Err(self.err(
                InputKind::BadValue,
                key,
                "the left end of a solid cylinder or sphere is its centre: leave it out (or sealed), or give sample.inner_radius for a hollow body",
            ));
        }
        Ok(end)
    }

    fn initial(&mut self, s: &InitialSpec, key: &str) -> Result<InitialT> {
        match (&s.value, &s.rows) {
            (Some(v), None) => Ok(InitialT::Uniform(self.num(
                v,
                Kind::Value,
                Check::Any,
                &format!("{key}.value"),
            )?)),
            (None, Some(rows)) => {
                let pu = s.position_unit.as_deref().ok_or_else(|| {
                    self.err(
                        InputKind::MissingKey,
                        &format!("{key}.position_unit"),
                        format!("'{key}.rows' needs 'position_unit'"),
                    )
                })?;
                let pc = quantity::conversion(Kind::Length, Some(pu), &self.value_unit).map_err(
                    |m| self.err(InputKind::UnknownUnit, &format!("{key}.position_unit"), m),
                )?;
                let vc =
                    quantity::conversion(Kind::Value, s.value_unit.as_deref(), &self.value_unit)
                        .map_err(|m| {
                            self.err(InputKind::UnknownUnit, &format!("{key}.value_unit"), m)
                        })?;
                let rows: Vec<(f64, f64)> = rows
                    .iter()
                    .map(|r| (pc.to_si(r[0]), vc.to_si(r[1])))
                    .collect();
                check_rows(self, &rows, &format!("{key}.rows"), "positions")?;
                Ok(InitialT::Table(rows))
            }
            (None, None) => Err(self.err(
                InputKind::MissingKey,
                &format!("{key}.value"),
                format!("'{key}' needs 'value' (uniform) or 'rows'"),
            )),
            (Some(_), Some(_)) => Err(self.err(
                InputKind::BadValue,
                key,
                format!("'{key}' takes 'value' or 'rows', not both"),
            )),
        }
    }

    fn law(&mut self, l: &LawSpec, key: &str) -> Result<LawT> {
        match l {
            LawSpec::Scalar(s) => Ok(LawT::Constant(self.num(
                s,
                Kind::Diffusivity,
                Check::Positive,
                key,
            )?)),
            LawSpec::Table(t) => {
                let d0 = self.num(
                    &t.d0,
                    Kind::Diffusivity,
                    Check::Positive,
                    &format!("{key}.d0"),
                )?;
                if t.law == LawName::Constant {
                    if t.beta.is_some() || t.u_ref.is_some() {
                        return Err(self.err(
                            InputKind::BadValue,
                            key,
                            "a constant law takes only 'd0'",
                        ));
                    }
                    return Ok(LawT::Constant(d0));
                }
                let beta = t.beta.as_ref().ok_or_else(|| {
                    self.err(
                        InputKind::MissingKey,
                        &format!("{key}.beta"),
                        "this law needs 'beta'",
                    )
                })?;
                let beta = self.num(
                    beta,
                    Kind::Dimensionless,
                    Check::Any,
                    &format!("{key}.beta"),
                )?;
                let u_ref = t.u_ref.as_ref().ok_or_else(|| {
                    self.err(
                        InputKind::MissingKey,
                        &format!("{key}.u_ref"),
                        "this law needs 'u_ref'",
                    )
                })?;
                let u_ref = self.num(
                    u_ref,
                    Kind::ValueDifference,
                    Check::Positive,
                    &format!("{key}.u_ref"),
                )?;
                Ok(match t.law {
                    LawName::Exponential => LawT::Exponential(d0, beta, u_ref),
                    _ => LawT::Linear(d0, beta, u_ref),
                })
            }
        }
    }

    fn geometry(&mut self, s: &SampleSpec) -> Result<(Shape, Num, Vec<LayerT>)> {
        let shape = match s.shape {
            ShapeName::Slab => Shape::Slab,
            ShapeName::Cylinder => Shape::Cylinder,
            ShapeName::Sphere => Shape::Sphere,
        };
        if shape == Shape::Slab {
            for (k, v) in [("radius", &s.radius), ("inner_radius", &s.inner_radius)] {
                if v.is_some() {
                    return Err(self.err(
                        InputKind::BadValue,
                        &format!("sample.{k}"),
                        format!("a slab has no '{k}'; give 'thickness'"),
                    ));
                }
            }
        } else if s.thickness.is_some() {
            return Err(self.err(InputKind::BadValue, "sample.thickness", "a cylinder or sphere is sized by 'radius' (and 'inner_radius' when hollow), or by layers"));
        }
        let inner = self.opt_num(
            s.inner_radius.as_ref(),
            0.0,
            Kind::Length,
            Check::NonNegative,
            "sample.inner_radius",
        )?;
        if let Some(layers) = &s.layers {
            for k in ["thickness", "radius", "diffusivity"] {
                let given = match k {
                    "thickness" => s.thickness.is_some(),
                    "radius" => s.radius.is_some(),
                    _ => s.diffusivity.is_some(),
                };
                if given {
                    return Err(self.err(
                        InputKind::BadValue,
                        &format!("sample.{k}"),
                        format!("with [[sample.layers]], give '{k}' in each layer instead"),
                    ));
                }
            }
            if layers.is_empty() {
                return Err(self.err(
                    InputKind::BadValue,
                    "sample.layers",
                    "give at least one layer",
                ));
            }
            let mut out = Vec::with_capacity(layers.len());
            for (i, l) in layers.iter().enumerate() {
                let k = format!("sample.layers[{i}]");
                out.push(LayerT {
                    thickness: ThicknessT::Direct(self.num(
                        &l.thickness,
                        Kind::Length,
                        Check::Positive,
                        &format!("{k}.thickness"),
                    )?),
                    law: self.law(&l.diffusivity, &format!("{k}.diffusivity"))?,
                    partition: self.opt_num(
                        l.partition_to_next.as_ref(),
                        1.0,
                        Kind::Dimensionless,
                        Check::Positive,
                        &format!("{k}.partition_to_next"),
                    )?,
                });
            }
            return Ok((shape, inner, out));
        }
        let law = match &s.diffusivity {
            Some(l) => self.law(l, "sample.diffusivity")?,
            None => {
                return Err(self.err(
                    InputKind::MissingKey,
                    "sample.diffusivity",
                    "give 'diffusivity' (or [[sample.layers]])",
                ))
            }
        };
        let thickness = if shape == Shape::Slab {
            let t = s.thickness.as_ref().ok_or_else(|| {
                self.err(
                    InputKind::MissingKey,
                    "sample.thickness",
                    "a slab needs 'thickness' (or [[sample.layers]])",
                )
            })?;
            ThicknessT::Direct(self.num(t, Kind::Length, Check::Positive, "sample.thickness")?)
        } else {
            let r = s.radius.as_ref().ok_or_else(|| {
                self.err(
                    InputKind::MissingKey,
                    "sample.radius",
                    "a cylinder or sphere needs 'radius' (or [[sample.layers]])",
                )
            })?;
            let outer = self.num(r, Kind::Length, Check::Positive, "sample.radius")?;
            if let (Num::Const(o), Num::Const(i)) = (outer, inner) {
                if o <= i {
                    return Err(self.err(
                        InputKind::BadValue,
                        "sample.radius",
                        format!("the radius ({o:e} m) must exceed the inner radius ({i:e} m)"),
                    ));
                }
            }
            ThicknessT::Between(outer, inner)
        };
        Ok((
            shape,
            inner,
            vec![LayerT {
                thickness,
                law,
                partition: Num::Const(1.0),
            }],
        ))
    }
}

/// The sample's extent (left, right coordinate, m) when it does not depend on parameters.
fn const_extent(t: &ModelT) -> Option<(f64, f64)> {
    let Num::Const(inner) = t.inner_radius else {
        return None;
    };
    let mut total = 0.0;
    for l in &t.layers {
        total += match l.thickness {
            ThicknessT::Direct(Num::Const(v)) => v,
            ThicknessT::Between(Num::Const(o), Num::Const(i)) => o - i,
            _ => return None,
        };
    }
    Some((inner, inner + total))
}

fn example(kind: Kind) -> &'static str {
    match kind {
        Kind::Length => "120 um",
        Kind::Time => "10 min",
        Kind::Diffusivity => "1e-12 m2/s",
        Kind::Rate => "0.001 1/s",
        Kind::Speed => "1e-6 m/s",
        Kind::Value => "25 degC",
        Kind::ValueDifference => "5 degC",
        Kind::Flux => "1e-3 K m/s",
        Kind::Dimensionless | Kind::Measured => "1.0",
        Kind::Angle => "0 rad",
        Kind::Pressure => "2 bar",
        Kind::Solubility => "0.5 mol/m3/bar",
    }
}

fn check_rows(b: &Builder<'_>, rows: &[(f64, f64)], key: &str, what: &str) -> Result<()> {
    if rows.is_empty() {
        return Err(b.err(InputKind::BadValue, key, format!("'{key}' has no rows")));
    }
    if let Some(i) = rows
        .iter()
        .position(|(x, y)| !(x.is_finite() && y.is_finite()))
    {
        return Err(b.err(
            InputKind::NotFinite,
            key,
            format!(
                "'{key}': row {} is not a pair of finite numbers (nan and inf are not values)",
                i + 1
            ),
        ));
    }
    for (i, w) in rows.windows(2).enumerate() {
        if w[1].0 <= w[0].0 {
            return Err(b.err(
                InputKind::BadValue,
                key,
                format!(
                    "'{key}': {what} must increase, row {} is not after row {}",
                    i + 2,
                    i + 1
                ),
            ));
        }
    }
    Ok(())
}

fn end_of(e: EndName) -> End {
    match e {
        EndName::Left => End::Left,
        EndName::Right => End::Right,
    }
}

/// Resolve a parsed file. `base` is the directory data paths are relative to.
pub(super) fn build(file: &ExperimentFile, index: &SpanIndex, base: &Path) -> Result<Experiment> {
    let mut b = Builder {
        index,
        base: base.to_path_buf(),
        value_unit: quantity::value_unit(&file.sample.value_unit),
        specs: &file.parameters,
        params: Vec::new(),
        lookup: BTreeMap::new(),
        dataset: None,
    };
    if file.sample.value_unit.trim().is_empty() {
        return Err(b.err(
            InputKind::BadValue,
            "sample.value_unit",
            "give the unit of the sample's values (K, degC, mol/m3, ...)",
        ));
    }
    for name in file.parameters.keys() {
        if !quantity::is_name(name) {
            return Err(b.err(InputKind::BadValue, &format!("parameters.{name}"), format!("'{name}' is not a parameter name: use letters, digits and _, starting with a letter")));
        }
    }
    if file.datasets.is_empty() {
        return Err(b.err(
            InputKind::MissingKey,
            "datasets",
            "give at least one [[datasets]]",
        ));
    }
    let mut datasets = Vec::with_capacity(file.datasets.len());
    for (i, d) in file.datasets.iter().enumerate() {
        if file.datasets[..i].iter().any(|o| o.name == d.name) {
            return Err(b.err(
                InputKind::BadValue,
                &format!("datasets[{i}].name"),
                format!("dataset name '{}' is used twice", d.name),
            ));
        }
        b.dataset = Some((i, d));
        datasets.push(dataset(&mut b, file, i, d)?);
    }
    // Per-dataset start values must name per-dataset parameters.
    for (i, d) in file.datasets.iter().enumerate() {
        for name in d.starts.iter().flat_map(|s| s.keys()) {
            let key = format!("datasets[{i}].starts.{name}");
            match file.parameters.get(name) {
                None => {
                    let hint =
                        suggest::did_you_mean(name, file.parameters.keys().map(String::as_str));
                    return Err(b.err(
                        InputKind::UndefinedParameter,
                        &key,
                        format!("'{name}' is not a defined parameter{hint}"),
                    ));
                }
                Some(p) if !p.per_dataset => {
                    return Err(b.err(InputKind::BadValue, &key, format!("'{name}' is shared; only per_dataset parameters take a start per dataset")));
                }
                _ => {}
            }
        }
    }
    for name in file.parameters.keys() {
        if !b.lookup.keys().any(|(n, _)| n == name) {
            return Err(b.err(
                InputKind::BadValue,
                &format!("parameters.{name}"),
                format!("parameter '{name}' is defined but never used; remove it or refer to it"),
            ));
        }
    }
    let n_params = b.params.len();
    for d in &mut datasets {
        d.n_params = n_params;
    }
    let params = std::mem::take(&mut b.params);
    let free = params.iter().filter(|p| p.free).count();
    let points: usize = datasets.iter().map(Dataset::len).sum();
    if points < free + 1 {
        return Err(Error::input(
            InputKind::TooFewPoints,
            index.location("datasets"),
            format!(
                "{points} data points for {free} free parameters: a fit needs at least {} points",
                free + 1
            ),
        ));
    }
    let exp = Experiment {
        file: index.file().to_path_buf(),
        title: file.title.clone(),
        value_unit: file.sample.value_unit.clone(),
        parameters: params,
        datasets: Arc::new(datasets),
        solver: solver_options(&file.solver, index)?,
        fit: fit_options(&file.fit, index)?,
        derived: Vec::new(),
        temperature: match &file.temperature {
            None => None,
            Some(t) => Some(temperature_of(&b, t)?),
        },
    };
    let mut exp = exp;
    exp.derived = derived_requests(&b, file, &exp)?;
    // The model must make sense at the start values (pending automatic starts at a
    // placeholder inside their bounds).
    let start: Vec<f64> = exp
        .parameters
        .iter()
        .map(|p| {
            if p.start_given {
                p.start
            } else {
                p.placeholder()
            }
        })
        .collect();
    for d in exp.datasets.iter() {
        if let Err(e) = d.model_for(&start) {
            return Err(Error::input(
                InputKind::BadValue,
                index.location(&d.key),
                format!(
                    "at the start values, the model of dataset '{}' is not valid: {e}",
                    d.name
                ),
            ));
        }
    }
    Ok(exp)
}

/// The run's temperature (`temperature`), K.
fn temperature_of(b: &Builder, s: &Scalar) -> Result<f64> {
    let key = "temperature";
    let written = match s {
        Scalar::Text(t) => quantity::split_number(t),
        Scalar::Number(_) => None,
    };
    let Some(w) = written.filter(|w| w.unit.is_some()) else {
        return Err(b.err(
            InputKind::BadValue,
            key,
            "give the temperature with its unit, such as \"1200 K\" or \"925 degC\"",
        ));
    };
    let unit = crate::units::Unit::parse_at(
        w.unit.as_deref().unwrap_or(""),
        Some(Quantity::Temperature),
        &b.index.location(key),
    )?;
    let t = unit.to_si(w.number);
    if !(t.is_finite() && t > 0.0) {
        return Err(b.err(
            InputKind::BadValue,
            key,
            format!("the temperature must be above absolute zero, found {t} K"),
        ));
    }
    Ok(t)
}

/// A number with one of the units of a derived quantity's input, in SI.
/// ρ (kg/m³) and c_p (J/(kg K)) of a `[derived.NAME]` table, each with its standard
/// uncertainty (zero when not given).
fn heat_inputs(b: &Builder, spec: &DerivedSpec, key: &str) -> Result<HeatInputs> {
    let k = |s: &str| format!("{key}.{s}");
    let num = |s: &Option<Scalar>, units, what, field: &str| -> Result<f64> {
        match s {
            Some(s) => derived_number(b, s, units, what, &k(field)),
            None => Ok(0.0),
        }
    };
    let rho = num(&spec.density, DENSITY_UNITS, "density", "density")?;
    let u_rho = num(
        &spec.density_uncertainty,
        DENSITY_UNITS,
        "density",
        "density_uncertainty",
    )?;
    let cp = num(
        &spec.heat_capacity,
        HEAT_CAPACITY_UNITS,
        "heat capacity",
        "heat_capacity",
    )?;
    let u_cp = num(
        &spec.heat_capacity_uncertainty,
        HEAT_CAPACITY_UNITS,
        "heat capacity",
        "heat_capacity_uncertainty",
    )?;
    for (v, field) in [(rho, "density"), (cp, "heat_capacity")] {
        if v <= 0.0 {
            return Err(b.err(
                InputKind::BadValue,
                &k(field),
                format!("{key}.{field} must be > 0"),
            ));
        }
    }
    for (v, field) in [
        (u_rho, "density_uncertainty"),
        (u_cp, "heat_capacity_uncertainty"),
    ] {
        if v < 0.0 {
            return Err(b.err(
                InputKind::BadValue,
                &k(field),
                format!("{key}.{field} must be ≥ 0"),
            ));
        }
    }
    Ok(((rho, u_rho), (cp, u_cp)))
}

fn derived_number(
    b: &Builder,
    s: &Scalar,
    units: &[(&str, f64)],
    what: &str,
    key: &str,
) -> Result<f64> {
    let (number, unit) = match s {
        Scalar::Number(x) => (*x, None),
        Scalar::Text(t) => match quantity::split_number(t) {
            Some(w) => (w.number, w.unit),
            None => {
                return Err(b.err(
                    InputKind::BadValue,
                    key,
                    format!("'{t}' is not a number with unit (for '{key}', a {what})"),
                ))
            }
        },
    };
    if !number.is_finite() {
        return Err(b.err(InputKind::NotFinite, key, format!("'{key}' must be finite")));
    }
    let names: Vec<&str> = units.iter().map(|u| u.0).collect();
    let Some(unit) = unit else {
        return Err(b.err(
            InputKind::UnknownUnit,
            key,
            format!("give the unit of the {what} ({})", names.join(", ")),
        ));
    };
    let squeezed: String = unit
        .chars()
        .filter(|c| !c.is_whitespace() && *c != '*' && *c != '·')
        .collect();
    match units.iter().find(|u| u.0.replace(' ', "") == squeezed) {
        Some((_, scale)) => Ok(number * scale),
        None => Err(b.err(
            InputKind::UnknownUnit,
            key,
            format!(
                "unknown unit '{unit}' for the {what}: use one of {}",
                names.join(", ")
            ),
        )),
    }
}

const DENSITY_UNITS: &[(&str, f64)] =
    &[("kg/m3", 1.0), ("g/cm3", 1e3), ("g/mL", 1e3), ("kg/L", 1e3)];
const HEAT_CAPACITY_UNITS: &[(&str, f64)] = &[
    ("J/(kg K)", 1.0),
    ("J/kg/K", 1.0),
    ("J/(g K)", 1e3),
    ("J/g/K", 1e3),
    ("kJ/(kg K)", 1e3),
    ("kJ/kg/K", 1e3),
];

fn derived_requests(
    b: &Builder,
    file: &ExperimentFile,
    exp: &Experiment,
) -> Result<Vec<DerivedRequest>> {
    let mut out = Vec::new();
    for (name, spec) in &file.derived {
        let key = format!("derived.{name}");
        let k = |s: &str| format!("{key}.{s}");
        let dataset = |b: &Builder| -> Result<usize> {
            match &spec.dataset {
                None => Ok(0),
                Some(n) => exp
                    .datasets
                    .iter()
                    .position(|d| &d.name == n)
                    .ok_or_else(|| {
                        let hint =
                            suggest::did_you_mean(n, exp.datasets.iter().map(|d| d.name.as_str()));
                        b.err(
                            InputKind::BadValue,
                            &k("dataset"),
                            format!("no dataset is named '{n}'{hint}"),
                        )
                    }),
            }
        };
        let needs = |field: &str, present: bool| -> Result<()> {
            if present {
                Ok(())
            } else {
                Err(b.err(
                    InputKind::MissingKey,
                    &k(field),
                    format!("{key} needs `{field}`"),
                ))
            }
        };
        let what = match spec.quantity {
            DerivedName::Conductivity => {
                let diffusivity = diffusivity_of(b, spec, exp, &key)?;
                needs("density", spec.density.is_some())?;
                needs("heat_capacity", spec.heat_capacity.is_some())?;
                let (density, heat_capacity) = heat_inputs(b, spec, &key)?;
                DerivedWhat::Conductivity {
                    diffusivity,
                    density,
                    heat_capacity,
                }
            }
            DerivedName::EquilibriumTime => {
                let fraction = spec.fraction.unwrap_or(0.95);
                if !(fraction > 0.0 && fraction < 1.0) {
                    return Err(b.err(
                        InputKind::BadValue,
                        &k("fraction"),
                        format!(
                            "expected a fraction between 0 and 1 (such as 0.95), found {fraction}"
                        ),
                    ));
                }
                DerivedWhat::EquilibriumTime {
                    dataset: dataset(b)?,
                    fraction,
                }
            }
            DerivedName::FluxIn => {
                needs("end", spec.end.is_some())?;
                needs("times", spec.times.is_some())?;
                let times = spec
                    .times
                    .iter()
                    .flatten()
                    .enumerate()
                    .map(|(i, t)| {
                        b.literal(t, Kind::Time, Check::Positive, &format!("{key}.times[{i}]"))
                            .map(|x| x.0)
                    })
                    .collect::<Result<Vec<f64>>>()?;
                if times.is_empty() {
                    return Err(b.err(InputKind::BadValue, &k("times"), "give at least one time"));
                }
                // With ρ and c_p, a temperature flux (K·m/s) becomes a heat flux in W/m².
                let heat = match (&spec.density, &spec.heat_capacity) {
                    (None, None) => None,
                    (Some(_), Some(_)) => {
                        if !exp.value_unit_is_temperature() {
                            return Err(b.err(
                                InputKind::BadValue,
                                &k("density"),
                                "density and heat_capacity turn a temperature flux into W/m²; \
                                 this sample's values are not temperatures, so leave them out",
                            ));
                        }
                        Some(heat_inputs(b, spec, &key)?)
                    }
                    (Some(_), None) => return Err(needs("heat_capacity", false).unwrap_err()),
                    (None, Some(_)) => return Err(needs("density", false).unwrap_err()),
                };
                DerivedWhat::FluxIn {
                    dataset: dataset(b)?,
                    end: match spec.end {
                        Some(EndWhich::Left) => End::Left,
                        _ => End::Right,
                    },
                    times,
                    heat,
                }
            }
            DerivedName::Permeability => {
                let diffusivity = diffusivity_of(b, spec, exp, &key)?;
                let solubility = match &spec.solubility {
                    Some(Scalar::Text(t)) if !quantity::looks_numeric(t) => {
                        let t = t.trim();
                        match exp.parameters.iter().position(|p| p.name == t) {
                            Some(i) if exp.parameters[i].kind == Kind::Solubility => {
                                Term::Parameter(i)
                            }
                            Some(_) => {
                                return Err(b.err(
                                    InputKind::BadValue,
                                    &k("solubility"),
                                    format!("'{t}' is not a solubility coefficient (it is not used as a face's 'solubility')"),
                                ))
                            }
                            None => {
                                let hint = suggest::did_you_mean(
                                    t,
                                    exp.parameters.iter().map(|p| p.name.as_str()),
                                );
                                return Err(b.err(
                                    InputKind::UndefinedParameter,
                                    &k("solubility"),
                                    format!("no parameter is named '{t}'{hint}"),
                                ));
                            }
                        }
                    }
                    Some(sc) => Term::Constant(
                        b.literal(sc, Kind::Solubility, Check::Positive, &k("solubility"))?
                            .0,
                    ),
                    None => match exp.datasets.iter().find_map(Dataset::gas_solubility) {
                        Some(t) => t,
                        None => {
                            return Err(b.err(
                                InputKind::MissingKey,
                                &k("solubility"),
                                "no face of the sample is under a gas (`value = { pressure = ..., solubility = ... }`): give `solubility` (a parameter name, or a number with unit such as \"0.5 mol/m3/bar\")",
                            ))
                        }
                    },
                };
                DerivedWhat::Permeability {
                    diffusivity,
                    solubility,
                }
            }
            DerivedName::TimeLag => DerivedWhat::TimeLag {
                dataset: dataset(b)?,
            },
        };
        out.push(DerivedRequest {
            name: name.clone(),
            what,
        });
    }
    out.extend(automatic_derived(exp, &out));
    Ok(out)
}

/// Derived quantities every permeation experiment reports without being asked (unless the
/// file asks for them itself): the permeability P = D S when a face is under a gas and D is a
/// parameter, and the time lag θ = L²/(6D) of each run that measures the amount through a
/// face (cumulative in or out) of a single-layer slab whose D is a parameter.
fn automatic_derived(exp: &Experiment, asked: &[DerivedRequest]) -> Vec<DerivedRequest> {
    let mut out = Vec::new();
    let has = |f: fn(&DerivedWhat) -> bool| asked.iter().any(|r| f(&r.what));
    let taken = |name: &str| asked.iter().any(|r| r.name == name);
    if !has(|w| matches!(w, DerivedWhat::Permeability { .. })) && !taken("permeability") {
        let found = exp.datasets.iter().find_map(|d| {
            let s = d.gas_solubility()?;
            let diffusivity = d.diffusivity_parameter()?;
            Some((diffusivity, s))
        });
        if let Some((diffusivity, solubility)) = found {
            out.push(DerivedRequest {
                name: "permeability".into(),
                what: DerivedWhat::Permeability {
                    diffusivity,
                    solubility,
                },
            });
        }
    }
    if !has(|w| matches!(w, DerivedWhat::TimeLag { .. })) {
        let through_face: Vec<usize> = (0..exp.datasets.len())
            .filter(|&i| {
                let d = &exp.datasets[i];
                d.template.shape == Shape::Slab
                    && d.template.layers.len() == 1
                    && matches!(d.template.layers[0].law, LawT::Constant(Num::Param(_)))
                    && matches!(
                        d.request.observables.as_slice(),
                        [Observable::CumulativeOut(_) | Observable::CumulativeIn(_)]
                    )
            })
            .collect();
        for &i in &through_face {
            let name = if through_face.len() == 1 {
                "time_lag".to_string()
            } else {
                format!("time_lag[{}]", exp.datasets[i].name)
            };
            if !taken(&name) {
                out.push(DerivedRequest {
                    name,
                    what: DerivedWhat::TimeLag { dataset: i },
                });
            }
        }
    }
    out
}

/// The diffusivity parameter a `[derived.NAME]` table names (`diffusivity`), or the first
/// run's.
fn diffusivity_of(b: &Builder, spec: &DerivedSpec, exp: &Experiment, key: &str) -> Result<usize> {
    let k = |s: &str| format!("{key}.{s}");
    let i = match &spec.diffusivity {
        Some(pname) => match exp.parameters.iter().position(|p| &p.name == pname) {
            Some(i) => i,
            None => {
                let hint =
                    suggest::did_you_mean(pname, exp.parameters.iter().map(|p| p.name.as_str()));
                return Err(b.err(
                    InputKind::UndefinedParameter,
                    &k("diffusivity"),
                    format!("no parameter is named '{pname}'{hint}"),
                ));
            }
        },
        None => match exp
            .datasets
            .first()
            .and_then(Dataset::diffusivity_parameter)
        {
            Some(i) => i,
            None => {
                return Err(b.err(
                    InputKind::MissingKey,
                    &k("diffusivity"),
                    "name the fitted diffusivity parameter (`diffusivity = \"alpha\"`)",
                ))
            }
        },
    };
    if exp.parameters[i].kind != Kind::Diffusivity {
        return Err(b.err(
            InputKind::BadValue,
            &k("diffusivity"),
            format!("'{}' is not a diffusivity", exp.parameters[i].name),
        ));
    }
    Ok(i)
}

fn solver_options(s: &SolverSpec, index: &SpanIndex) -> Result<SolverOptions> {
    let d = SolverOptions::default();
    let g = GridOptions::default();
    let o = SolverOptions {
        tolerance: s.tolerance.unwrap_or(d.tolerance),
        grid: GridOptions {
            smallest_cell: s.smallest_cell.unwrap_or(g.smallest_cell),
            largest_cell: s.largest_cell.unwrap_or(g.largest_cell),
            growth: s.growth.unwrap_or(g.growth),
            uniform_cells: s.uniform_cells,
        },
        maximum_steps: s.maximum_steps.unwrap_or(d.maximum_steps),
        maximum_newton_iterations: d.maximum_newton_iterations,
    };
    o.validate()
        .map_err(|e| Error::input(InputKind::BadValue, index.location("solver"), e.to_string()))?;
    Ok(o)
}

fn fit_options(s: &FitSpec, index: &SpanIndex) -> Result<FitOptions> {
    let d = FitOptions::default();
    let o = FitOptions {
        interval_level: s.interval_level.unwrap_or(d.interval_level),
        maximum_iterations: s.maximum_iterations.unwrap_or(d.maximum_iterations),
        tolerance: s.tolerance.unwrap_or(d.tolerance),
    };
    if !(o.interval_level > 0.0 && o.interval_level < 1.0) {
        return Err(Error::input(
            InputKind::BadValue,
            index.location("fit.interval_level"),
            format!(
                "must be between 0 and 1 (0.95 for 95 %), found {}",
                o.interval_level
            ),
        ));
    }
    if o.maximum_iterations == 0 {
        return Err(Error::input(
            InputKind::BadValue,
            index.location("fit.maximum_iterations"),
            "must be at least 1",
        ));
    }
    if !(o.tolerance > 0.0 && o.tolerance < 1.0) {
        return Err(Error::input(
            InputKind::BadValue,
            index.location("fit.tolerance"),
            format!("must be between 0 and 1, found {}", o.tolerance),
        ));
    }
    Ok(o)
}

/// The unit to read a dataset's value column(s) in, when the header's is not to be used.
fn measured_unit(b: &Builder<'_>, d: &DatasetSpec) -> Option<Unit> {
    match &d.value_unit {
        Some(u) => Some(Unit::parse(u).unwrap_or_else(|_| Unit::arbitrary(u.as_str()))),
        None if b.value_unit.quantity() == Quantity::Arbitrary
            && matches!(d.observe, ObserveName::Value | ObserveName::Mean) =>
        {
            Some(b.value_unit.clone())
        }
        None => None,
    }
}

fn dataset(
    b: &mut Builder<'_>,
    file: &ExperimentFile,
    i: usize,
    d: &DatasetSpec,
) -> Result<Dataset> {
    let key = format!("datasets[{i}]");
    let k = |s: &str| format!("{key}.{s}");
    // The model template: top-level sections with this run's replacements.
    let (shape, inner, mut layers) = b.geometry(&file.sample)?;
    if let Some(size) = &d.sample {
        sample_override(b, &file.sample, size, &key, shape, inner, &mut layers)?;
    }
    let centre = shape != Shape::Slab && inner == Num::Const(0.0);
    let ov = d.ends.clone().unwrap_or_default();
    let left = match (&ov.left, &file.ends.left) {
        (Some(e), _) => b.end(e, &k("ends.left"), centre)?,
        (None, Some(e)) => b.end(e, "ends.left", centre)?,
        (None, None) if centre => EndT::Sealed,
        (None, None) => {
            return Err(b.err(
                InputKind::MissingKey,
                "ends.left",
                "give the left end: value, flux, transfer or sealed",
            ))
        }
    };
    let right = match &ov.right {
        Some(e) => b.end(e, &k("ends.right"), false)?,
        None => b.end(&file.ends.right, "ends.right", false)?,
    };
    let initial = match &d.initial {
        Some(s) => b.initial(s, &k("initial"))?,
        None => b.initial(&file.initial, "initial")?,
    };
    let vol = file.volume.clone().unwrap_or_default();
    let exchange_rate = b.opt_num(
        vol.exchange_rate.as_ref(),
        0.0,
        Kind::Rate,
        Check::NonNegative,
        "volume.exchange_rate",
    )?;
    let ambient = match (&vol.ambient, &vol.exchange_rate) {
        (Some(a), _) => b.num(a, Kind::Value, Check::Any, "volume.ambient")?,
        (None, Some(_)) => {
            return Err(b.err(
                InputKind::MissingKey,
                "volume.ambient",
                "an exchange rate needs the 'ambient' value it exchanges with",
            ))
        }
        (None, None) => Num::Const(0.0),
    };
    let reaction_rate = b.opt_num(
        vol.reaction_rate.as_ref(),
        0.0,
        Kind::Rate,
        Check::NonNegative,
        "volume.reaction_rate",
    )?;
    let template = ModelT {
        shape,
        inner_radius: inner,
        layers,
        left,
        right,
        initial,
        exchange_rate,
        ambient,
        reaction_rate,
    };

    // The data.
    let path = b.resolve_path(&d.file, &k("file"))?;
    let origin = match &d.time_origin {
        Some(s) => Some(b.literal(s, Kind::Time, Check::Any, &k("time_origin"))?.0),
        None => None,
    };
    let exposure_start = match &d.exposure_start {
        Some(s) => Some(b.num(s, Kind::Time, Check::Any, &k("exposure_start"))?),
        None => None,
    };
    if exposure_start.is_some() {
        let tabled = |e: &EndT| match e {
            EndT::Value(s) | EndT::Flux(s) | EndT::Transfer { outside: s, .. } => {
                matches!(s, SignalT::Table(_))
            }
            EndT::Sealed => false,
        };
        if tabled(&template.left) || tabled(&template.right) {
            return Err(b.err(
                InputKind::BadValue,
                &k("exposure_start"),
                "'exposure_start' shifts a step exposure, but an end of this run follows a time \
                 table (rows or a file), which already says when the exposure began; remove \
                 'exposure_start' or give the end a constant value",
            ));
        }
    }
    let extent = const_extent(&template);
    let opts = ReadOptions {
        time_origin: origin,
        min_points: 1,
        sample_extent: extent,
        ..Default::default()
    };
    let need = |b: &Builder<'_>, v: &Option<String>, name: &str| -> Result<String> {
        v.clone().ok_or_else(|| {
            b.err(
                InputKind::MissingKey,
                &format!("{key}.{name}"),
                format!("dataset '{}' needs '{name}'", d.name),
            )
        })
    };
    let value_col = match d.layout {
        LayoutName::Sensors => {
            if d.value_column.is_some() {
                return Err(b.err(
                    InputKind::BadValue,
                    &k("value_column"),
                    "a sensor table names its columns in 'sensors', not in 'value_column'",
                ));
            }
            String::new()
        }
        _ => need(b, &d.value_column, "value_column")?,
    };
    let mut value_spec = ColumnSpec::new(value_col.clone());
    if let Some(u) = measured_unit(b, d) {
        value_spec = value_spec.with_unit(u);
    }
    let end_needed = |b: &Builder<'_>| -> Result<End> {
        d.end.map(end_of).ok_or_else(|| {
            b.err(
                InputKind::MissingKey,
                &format!("{key}.end"),
                "a flux or cumulative observable needs 'end' (left or right)",
            )
        })
    };
    let mut request = Request::default();
    let (mut observed, mut sigma_col, mut lines, mut positions, mut map) = (
        Vec::new(),
        None::<Vec<f64>>,
        Vec::new(),
        Vec::new(),
        Vec::new(),
    );
    let value_unit;
    let warnings;
    let only_value = |b: &Builder<'_>| -> Result<()> {
        if d.observe != ObserveName::Value {
            return Err(b.err(
                InputKind::BadValue,
                &format!("{key}.observe"),
                "sensor tables and profiles measure 'value' at positions",
            ));
        }
        Ok(())
    };
    if d.layout != LayoutName::TimeSeries && (d.run_column.is_some() || d.run.is_some()) {
        return Err(b.err(
            InputKind::BadValue,
            &k("run_column"),
            "'run_column' and 'run' select one run of a time-series file; sensor tables and profiles take one run per file",
        ));
    }
    match d.layout {
        LayoutName::TimeSeries => {
            let mut cols =
                SeriesColumns::new(need(b, &d.time_column, "time_column")?, value_col.clone());
            cols.value = value_spec;
            cols.sigma = d.sigma_column.clone().map(ColumnSpec::new);
            cols.run = d.run_column.clone();
            if cols.run.is_some() != d.run.is_some() {
                return Err(b.err(
                    InputKind::MissingKey,
                    &k(if d.run.is_some() { "run_column" } else { "run" }),
                    "a file with several runs needs both 'run_column' (its header) and 'run' (the label of this dataset's run)",
                ));
            }
            let loaded = data::read_time_series(&path, &cols, &opts)?;
            let mut series_warnings = loaded.warnings;
            let s = match &d.run {
                None => loaded.data.into_iter().next(),
                Some(label) => {
                    let found: Vec<String> =
                        loaded.data.iter().filter_map(|s| s.run.clone()).collect();
                    let pick = loaded
                        .data
                        .into_iter()
                        .find(|s| s.run.as_deref() == Some(label));
                    if pick.is_none() {
                        return Err(b.err(
                            InputKind::BadValue,
                            &k("run"),
                            format!(
                                "no run '{label}' in the file; its runs are: {}",
                                found.join(", ")
                            ),
                        ));
                    }
                    pick
                }
            }
            .ok_or_else(|| b.err(InputKind::Empty, &k("file"), "no data rows"))?;
            if let (Some(&first), Some(&last)) = (s.baseline.line.first(), s.baseline.line.last()) {
                let n = s.baseline.value.len();
                let mean = s.baseline.value.iter().sum::<f64>() / n as f64;
                series_warnings.push(Warning {
                    kind: crate::data::WarningKind::Baseline,
                    location: crate::error::Location::file(&path).with_line(first),
                    message: format!(
                        "{n} row(s) before the time origin (lines {first}–{last}) are the baseline, mean {} {}; they are not fitted (use their mean as the start of an offset parameter, or as the initial state)",
                        s.value_unit.from_si(mean),
                        s.value_unit.label()
                    ),
                });
            }
            warnings = series_warnings;
            let obs = match d.observe {
                ObserveName::Value => {
                    let p = d.position.as_ref().ok_or_else(|| {
                        b.err(
                            InputKind::MissingKey,
                            &k("position"),
                            "observing 'value' in a time series needs 'position'",
                        )
                    })?;
                    let x = b
                        .literal(p, Kind::Length, Check::NonNegative, &k("position"))?
                        .0;
                    if let Some((lo, hi)) = extent {
                        if x < lo - 1e-12 * hi || x > hi * (1.0 + 1e-12) {
                            return Err(b.err(
                                InputKind::PositionOutside,
                                &k("position"),
                                format!(
                                    "position {x:e} m is outside the sample ({lo:e} m to {hi:e} m)"
                                ),
                            ));
                        }
                    }
                    positions = vec![Some(x); s.time.len()];
                    Observable::ValueAt(x)
                }
                ObserveName::Amount => Observable::Amount,
                ObserveName::AmountChange => Observable::AmountChange,
                ObserveName::FractionalUptake => Observable::FractionalUptake,
                ObserveName::Mean => Observable::Mean,
                ObserveName::FluxIn => Observable::FluxIn(end_needed(b)?),
                ObserveName::CumulativeIn => Observable::CumulativeIn(end_needed(b)?),
                ObserveName::CumulativeOut => Observable::CumulativeOut(end_needed(b)?),
            };
            // Without a position (amount, uptake, flux...) `positions` stays empty.
            map = (0..s.time.len()).map(|t| (0, t)).collect();
            request.times = s.time;
            request.observables = vec![obs];
            observed = s.value;
            sigma_col = s.sigma;
            lines = s.line;
            value_unit = s.value_unit.label().to_string();
        }
        LayoutName::Sensors => {
            only_value(b)?;
            let list = d.sensors.as_ref().ok_or_else(|| {
                b.err(
                    InputKind::MissingKey,
                    &k("sensors"),
                    "a sensor table needs 'sensors' (columns and positions)",
                )
            })?;
            let mut specs = Vec::with_capacity(list.len());
            for (j, s) in list.iter().enumerate() {
                let x = b
                    .literal(
                        &s.position,
                        Kind::Length,
                        Check::NonNegative,
                        &k(&format!("sensors[{j}].position")),
                    )?
                    .0;
                let mut c = ColumnSpec::new(s.column.clone());
                if let Some(u) = measured_unit(b, d) {
                    c = c.with_unit(u);
                }
                specs.push(SensorSpec {
                    column: c,
                    position: Some(x),
                });
            }
            let cols = SensorColumns {
                time: ColumnSpec::new(need(b, &d.time_column, "time_column")?),
                sensors: specs,
            };
            let loaded = data::read_sensor_table(&path, &cols, &opts)?;
            warnings = loaded.warnings;
            let t = loaded.data;
            if d.sigma_column.is_some() {
                return Err(b.err(
                    InputKind::BadValue,
                    &k("sigma_column"),
                    "a sensor table takes a constant 'sigma', not a column",
                ));
            }
            for (j, s) in t.sensors.iter().enumerate() {
                request.observables.push(Observable::ValueAt(s.position));
                for (kk, v) in s.value.iter().enumerate() {
                    observed.push(*v);
                    lines.push(t.line.get(kk).copied().unwrap_or(0));
                    positions.push(Some(s.position));
                    map.push((j, kk));
                }
            }
            value_unit = t
                .sensors
                .first()
                .map(|s| s.unit.label().to_string())
                .unwrap_or_default();
            request.times = t.time;
        }
        LayoutName::Profiles => {
            only_value(b)?;
            let time = match (&d.time_column, &d.profile_time) {
                (Some(c), None) => ProfileTime::Column(ColumnSpec::new(c.clone())),
                (None, Some(t)) => ProfileTime::Fixed(
                    b.literal(t, Kind::Time, Check::NonNegative, &k("profile_time"))?
                        .0,
                ),
                (None, None) => {
                    return Err(b.err(
                        InputKind::MissingKey,
                        &k("time_column"),
                        "profiles need 'time_column' or 'profile_time'",
                    ))
                }
                (Some(_), Some(_)) => {
                    return Err(b.err(
                        InputKind::BadValue,
                        &k("profile_time"),
                        "give 'time_column' or 'profile_time', not both",
                    ))
                }
            };
            let cols = ProfileColumns {
                position: ColumnSpec::new(need(b, &d.position_column, "position_column")?),
                value: value_spec,
                sigma: d.sigma_column.clone().map(ColumnSpec::new),
                time,
            };
            let loaded = data::read_profiles(&path, &cols, &opts)?;
            warnings = loaded.warnings;
            // Distinct depths in first-seen order; the map from a depth's bits to its index
            // keeps this linear in the number of rows (a search of `xs` per row was quadratic).
            let mut xs: Vec<f64> = Vec::new();
            let mut index_of: HashMap<u64, usize> = HashMap::new();
            let mut sig = Vec::new();
            let mut has_sigma = true;
            for p in &loaded.data.profiles {
                let kk = request.times.len();
                request.times.push(p.time);
                for (n, &x) in p.position.iter().enumerate() {
                    // `+ 0.0` turns −0 into +0, so the two compare equal as with `==`; a NaN
                    // (never equal to itself) gets its own entry as before.
                    let o = if x.is_nan() {
                        xs.push(x);
                        xs.len() - 1
                    } else {
                        *index_of.entry((x + 0.0).to_bits()).or_insert_with(|| {
                            xs.push(x);
                            xs.len() - 1
                        })
                    };
                    map.push((o, kk));
                    observed.push(p.value.get(n).copied().unwrap_or(f64::NAN));
                    lines.push(p.line.get(n).copied().unwrap_or(0));
                    positions.push(Some(x));
                    match &p.sigma {
                        Some(s) => sig.push(s.get(n).copied().unwrap_or(f64::NAN)),
                        None => has_sigma = false,
                    }
                }
            }
            if has_sigma && !sig.is_empty() {
                sigma_col = Some(sig);
            }
            value_unit = loaded
                .data
                .profiles
                .first()
                .map(|p| p.value_unit.label().to_string())
                .unwrap_or_default();
            request.observables = xs.into_iter().map(Observable::ValueAt).collect();
        }
    }
    // Readings at or below the instrument's detection limit.
    let detection_limit = match (&d.detection_limit, d.below_detection_limit) {
        (None, None) => None,
        (None, Some(_)) => {
            return Err(b.err(
                InputKind::MissingKey,
                &k("detection_limit"),
                "'below_detection_limit' needs 'detection_limit' (the instrument's limit, in the unit of the measured column)",
            ))
        }
        (Some(s), treatment) => {
            let limit = measured_number(b, d, s, Kind::Value, &k("detection_limit"))?;
            let treatment = match treatment {
                Some(BelowLimitName::Exclude) => BelowLimit::Exclude,
                Some(BelowLimitName::Censor) | None => BelowLimit::Censor,
            };
            let dl = floor::apply(
                limit,
                treatment,
                &request,
                PointVectors {
                    observed: &mut observed,
                    sigma: &mut sigma_col,
                    lines: &mut lines,
                    positions: &mut positions,
                    map: &mut map,
                },
            );
            let all_below = match treatment {
                BelowLimit::Exclude => observed.is_empty(),
                BelowLimit::Censor => dl.points.len() == observed.len(),
            };
            if all_below {
                return Err(b.err(
                    InputKind::BadValue,
                    &k("detection_limit"),
                    format!(
                        "every reading of dataset '{}' is at or below the detection limit {limit:e} (SI): check the limit and its unit",
                        d.name
                    ),
                ));
            }
            Some(dl)
        }
    };
    // Positions must be inside the sample at the start values (checked when constant).
    // Uncertainty and weighting.
    let n = observed.len();
    let constant_sigma = match &d.sigma {
        Some(s) => {
            let kind = if matches!(d.observe, ObserveName::Value | ObserveName::Mean)
                && d.value_unit.is_none()
            {
                Kind::ValueDifference
            } else {
                Kind::Measured
            };
            let (number, unit) = match s {
                Scalar::Number(x) => (*x, d.value_unit.clone()),
                Scalar::Text(t) => match quantity::split_number(t) {
                    Some(w) => (w.number, w.unit.or_else(|| d.value_unit.clone())),
                    None => {
                        return Err(b.err(
                            InputKind::BadValue,
                            &k("sigma"),
                            format!("'{t}' is not a number with unit"),
                        ))
                    }
                },
            };
            let conv = quantity::conversion(kind, unit.as_deref(), &b.value_unit)
                .map_err(|m| b.err(InputKind::UnknownUnit, &k("sigma"), m))?;
            let v = conv.scale * number;
            if !(v.is_finite() && v > 0.0) {
                return Err(b.err(
                    InputKind::BadUncertainty,
                    &k("sigma"),
                    format!("an uncertainty must be positive, found {v:e} (SI)"),
                ));
            }
            Some(v)
        }
        None => None,
    };
    let (mut sigma, weighting) = match (d.weighting, sigma_col, constant_sigma, d.relative_sigma) {
        (_, Some(_), Some(_), _) => {
            return Err(b.err(
                InputKind::BadValue,
                &k("sigma"),
                "give 'sigma_column' or 'sigma', not both",
            ))
        }
        (Some(WeightingName::Relative) | None, None, None, Some(f)) => {
            if !(f.is_finite() && f > 0.0) {
                return Err(b.err(
                    InputKind::BadUncertainty,
                    &k("relative_sigma"),
                    format!("must be positive, found {f}"),
                ));
            }
            let mut s = Vec::with_capacity(n);
            for (y, line) in observed.iter().zip(&lines) {
                let v = f * y.abs();
                if v <= 0.0 {
                    return Err(Error::input(InputKind::BadUncertainty, Location::file(&path).with_line(*line), format!("relative weighting of dataset '{}' gives σ = 0 for the value 0; use absolute σ", d.name)));
                }
                s.push(v);
            }
            (Sigmas::Each(s), Weighting::Relative(f))
        }
        (Some(WeightingName::Relative), _, _, None) => {
            return Err(b.err(
                InputKind::MissingKey,
                &k("relative_sigma"),
                "relative weighting needs 'relative_sigma' (for example 0.01)",
            ))
        }
        (Some(WeightingName::Relative), _, _, Some(_)) => {
            return Err(b.err(
                InputKind::BadValue,
                &k("weighting"),
                "relative weighting takes 'relative_sigma' only, not 'sigma' or 'sigma_column'",
            ))
        }
        (w, col, c, None) => {
            let s = match (col, c) {
                (Some(s), _) => Sigmas::Each(s),
                (None, Some(c)) => Sigmas::Shared { value: c, len: n },
                (None, None) => Sigmas::Shared { value: 1.0, len: n },
            };
            let weighting = match w {
                Some(WeightingName::Absolute) if d.sigma.is_none() && d.sigma_column.is_none() => {
                    return Err(b.err(
                        InputKind::MissingKey,
                        &k("sigma"),
                        "absolute weighting needs 'sigma' or 'sigma_column'",
                    ));
                }
                Some(WeightingName::Absolute) => Weighting::Absolute,
                Some(WeightingName::Scaled) => Weighting::Scaled,
                _ if d.sigma.is_some() || d.sigma_column.is_some() => Weighting::Absolute,
                _ => Weighting::Scaled,
            };
            (s, weighting)
        }
        (_, _, _, Some(_)) => {
            return Err(b.err(
                InputKind::BadValue,
                &k("relative_sigma"),
                "'relative_sigma' goes with weighting = \"relative\" and no other σ",
            ))
        }
    };
    let scale = match &d.scale {
        Some(s) => Some(b.num(s, Kind::Measured, Check::Any, &k("scale"))?),
        None => None,
    };
    let offset = match &d.offset {
        Some(s) => Some(b.num(s, Kind::Measured, Check::Any, &k("offset"))?),
        None => None,
    };
    // Output indices as u32 pairs (see `Dataset::map`), none for a series of one quantity.
    let in_order = request.observables.len() == 1
        && map.len() == request.times.len()
        && map.iter().enumerate().all(|(i, &(o, t))| o == 0 && t == i);
    let map = if in_order { Vec::new() } else { map };
    let mut lines = lines
        .into_iter()
        .map(u32::try_from)
        .collect::<std::result::Result<Vec<u32>, _>>()
        .map_err(|_| {
            b.err(
                InputKind::BadValue,
                &k("file"),
                "a reading beyond line 4 294 967 295 of the data file: split the file into \
                 several datasets",
            )
        })?;
    let map = map
        .into_iter()
        .map(|(o, t)| Some((u32::try_from(o).ok()?, u32::try_from(t).ok()?)))
        .collect::<Option<Vec<(u32, u32)>>>()
        .ok_or_else(|| {
            b.err(
                InputKind::BadValue,
                &k("file"),
                "more than 4 294 967 295 readings in one dataset: split the file into several \
                 datasets",
            )
        })?;
    // The loader grows these as it reads; give back the spare capacity (up to half of
    // each at 10⁶ points).
    request.times.shrink_to_fit();
    observed.shrink_to_fit();
    if let Sigmas::Each(v) = &mut sigma {
        v.shrink_to_fit();
    }
    lines.shrink_to_fit();
    positions.shrink_to_fit();
    Ok(Dataset {
        name: d.name.clone(),
        file: path,
        file_as_written: d.file.clone(),
        key,
        request,
        observed,
        sigma,
        weighting,
        lines,
        positions,
        map,
        value_unit,
        warnings,
        detection_limit,
        template,
        scale,
        offset,
        exposure_start,
        n_params: 0,
    })
}

/// A number of a dataset in the unit of its measured column (`detection_limit`): with a unit,
/// or bare in the column's unit (`value_unit`, else the sample's). `kind` is `Value` for a
/// level, `ValueDifference` for an uncertainty.
fn measured_number(
    b: &Builder<'_>,
    d: &DatasetSpec,
    s: &Scalar,
    kind: Kind,
    key: &str,
) -> Result<f64> {
    let kind =
        if matches!(d.observe, ObserveName::Value | ObserveName::Mean) && d.value_unit.is_none() {
            kind
        } else {
            Kind::Measured
        };
    let (number, unit) = match s {
        Scalar::Number(x) => (*x, d.value_unit.clone()),
        Scalar::Text(t) => match quantity::split_number(t) {
            Some(w) => (w.number, w.unit.or_else(|| d.value_unit.clone())),
            None => {
                return Err(b.err(
                    InputKind::BadValue,
                    key,
                    format!("'{t}' is not a number with unit"),
                ))
            }
        },
    };
    let conv = quantity::conversion(kind, unit.as_deref(), &b.value_unit)
        .map_err(|m| b.err(InputKind::UnknownUnit, key, m))?;
    let v = conv.to_si(number);
    if !v.is_finite() {
        return Err(b.err(InputKind::NotFinite, key, format!("'{key}' must be finite")));
    }
    Ok(v)
}

/// Apply `[datasets.sample]` (this run's thickness or radius) to the one layer of the
/// top-level sample.
fn sample_override(
    b: &mut Builder<'_>,
    sample: &SampleSpec,
    size: &SampleOverride,
    key: &str,
    shape: Shape,
    inner: Num,
    layers: &mut [LayerT],
) -> Result<()> {
    let k = |s: &str| format!("{key}.sample.{s}");
    let [layer] = layers else {
        return Err(b.err(
            InputKind::BadValue,
            &format!("{key}.sample"),
            "a run's own sample size replaces the thickness or radius of a one-layer sample; \
             with [[sample.layers]] describe the other sample in its own experiment file",
        ));
    };
    if sample.layers.is_some() {
        return Err(b.err(
            InputKind::BadValue,
            &format!("{key}.sample"),
            "a run's own sample size replaces the thickness or radius of a one-layer sample, \
             not of [[sample.layers]]",
        ));
    }
    match (shape, &size.thickness, &size.radius) {
        (_, None, None) => Err(b.err(
            InputKind::MissingKey,
            &format!("{key}.sample"),
            if shape == Shape::Slab {
                "give this run's 'thickness'"
            } else {
                "give this run's 'radius'"
            },
        )),
        (Shape::Slab, Some(t), None) => {
            let n = b.num(t, Kind::Length, Check::Positive, &k("thickness"))?;
            layer.thickness = ThicknessT::Direct(n);
            Ok(())
        }
        (Shape::Slab, _, Some(_)) => Err(b.err(
            InputKind::BadValue,
            &k("radius"),
            "a slab has no 'radius'; give this run's 'thickness'",
        )),
        (_, Some(_), _) => Err(b.err(
            InputKind::BadValue,
            &k("thickness"),
            "a cylinder or sphere is sized by 'radius'; give this run's 'radius'",
        )),
        (_, None, Some(r)) => {
            let outer = b.num(r, Kind::Length, Check::Positive, &k("radius"))?;
            if let (Num::Const(o), Num::Const(i)) = (outer, inner) {
                if o <= i {
                    return Err(b.err(
                        InputKind::BadValue,
                        &k("radius"),
                        format!("the radius ({o:e} m) must exceed the inner radius ({i:e} m)"),
                    ));
                }
            }
            layer.thickness = ThicknessT::Between(outer, inner);
            Ok(())
        }
    }
}
