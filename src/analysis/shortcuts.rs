//! The classic shortcut estimators that match each dataset of an experiment, applied to its
//! data: reported beside the full fit (users compare them) and used as start values.
//!
//! Which estimator applies is read off the dataset's model and observable:
//! - an uptake curve (amount, amount change, mean value or fractional uptake against time) of a
//!   single-layer plane sheet (both faces exposed, or one sealed), solid cylinder or solid
//!   sphere: the half-time method (Crank 1975, §4.3.4 and eqs. 5.52, 6.20) and, for a sheet,
//!   the initial `√t` slope (Crank 1975, eq. 4.21 at short times);
//! - a depth profile at a fixed time: the erfc linearisation (Crank 1975, eq. 3.13), or the
//!   Gaussian one for a deposit on a sealed face (Crank 1975, eq. 3.6);
//! - the cumulative amount through a membrane's face: the time lag `θ = L²/(6D)` (Crank 1975,
//!   eq. 4.24a; Daynes 1920; Barrer 1939);
//! - temperatures at several sensors of a rod with a periodic end: Ångström's relation for
//!   every sensor pair.
//!
//! Each estimate carries the assumptions of its method and the ways in which this experiment
//! departs from them (surface resistance, a non-uniform start, volume terms), in plain words.
//! An estimator that cannot be applied to the data says why instead of giving a number.

use crate::analytic::sheet::Faces;
use crate::experiment::{Dataset, Experiment};
use crate::model::{EndCondition, Initial, Model, Shape, Signal};
use crate::shortcuts::angstrom::{self, Drift};
use crate::shortcuts::uptake::{self, Geometry, Plateau};
use crate::shortcuts::{fit_line, permeation, profile};
use crate::solver::Observable;

/// The shortcut methods.
#[derive(Debug, Clone, PartialEq)]
pub enum Method {
    /// Half-time of an uptake curve.
    HalfTime,
    /// Initial slope of `M_t/M_∞` against `√t` (plane sheet).
    InitialSlope,
    /// erfc linearisation of a depth profile measured at `time` (s).
    Erfc {
        /// Time of the profile, s.
        time: f64,
    },
    /// Gaussian linearisation of a profile spreading from a deposit, at `time` (s).
    Gaussian {
        /// Time of the profile, s.
        time: f64,
    },
    /// Permeation time lag.
    TimeLag,
    /// Ångström's relation for one sensor pair (positions in m from the periodic end).
    Angstrom {
        /// Position of the nearer sensor, m.
        near: f64,
        /// Position of the farther sensor, m.
        far: f64,
    },
}

impl Method {
    /// A short name for tables and report.json.
    pub fn label(&self) -> String {
        match self {
            Method::HalfTime => "half-time".into(),
            Method::InitialSlope => "initial sqrt(t) slope".into(),
            Method::Erfc { time } => format!("erfc linearisation at t = {}", seconds(*time)),
            Method::Gaussian { time } => {
                format!("Gaussian linearisation at t = {}", seconds(*time))
            }
            Method::TimeLag => "time lag".into(),
            Method::Angstrom { near, far } => format!(
                "Angstrom, sensors at {} and {} mm",
                trim(near * 1e3),
                trim(far * 1e3)
            ),
        }
    }
}

fn trim(x: f64) -> String {
    let s = format!("{x:.4}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.to_string()
}

fn seconds(t: f64) -> String {
    if t >= 7200.0 {
        format!("{} h", trim(t / 3600.0))
    } else if t >= 120.0 {
        format!("{} min", trim(t / 60.0))
    } else {
        format!("{} s", trim(t))
    }
}

/// One shortcut estimate of a dataset's diffusivity.
#[derive(Debug, Clone, PartialEq)]
pub struct ShortcutEstimate {
    /// Index of the dataset in [`Experiment::datasets`].
    pub dataset: usize,
    /// The method.
    pub method: Method,
    /// Index of the parameter estimated (the dataset's diffusivity), when it is a parameter.
    pub parameter: Option<usize>,
    /// The estimate of D, m²/s, or why the method could not be applied to these data.
    pub value: std::result::Result<f64, String>,
    /// Intermediate results worth reporting (`t_half = 5123 s`), SI.
    pub detail: Option<String>,
    /// What the method assumes.
    pub assumptions: Vec<String>,
    /// Where this experiment departs from those assumptions, in plain words.
    pub caveats: Vec<String>,
}

impl ShortcutEstimate {
    /// The estimate, when the method could be applied.
    pub fn estimate(&self) -> Option<f64> {
        self.value
            .as_ref()
            .ok()
            .copied()
            .filter(|d| d.is_finite() && *d > 0.0)
    }
}

/// Every shortcut estimate that matches the experiment's datasets. `params` is a full SI
/// parameter vector used to build each run's model (only the geometry and the kind of each end
/// are read from it; pending automatic starts may hold any positive placeholder).
pub fn estimate_all(experiment: &Experiment, params: &[f64]) -> Vec<ShortcutEstimate> {
    let mut out = Vec::new();
    for (i, d) in experiment.datasets.iter().enumerate() {
        let Ok(model) = d.model_for(params) else {
            continue;
        };
        // The methods read the data times on the model's clock (after the exposure start).
        match d.request_for(params) {
            std::borrow::Cow::Borrowed(_) => out.extend(for_dataset(i, d, &model)),
            std::borrow::Cow::Owned(request) => {
                let mut shifted = d.clone();
                shifted.request = request;
                out.extend(for_dataset(i, &shifted, &model));
            }
        }
    }
    out
}

/// A dataset's points as (observable index, time, observed SI), without readings censored at
/// a detection limit (their value is only a bound, which no shortcut can use).
fn points(d: &Dataset) -> Vec<(usize, f64, f64)> {
    d.outputs()
        .zip(&d.observed)
        .enumerate()
        .filter(|(i, _)| {
            !d.detection_limit
                .as_ref()
                .is_some_and(|dl| dl.is_censored(*i))
        })
        .map(|(_, ((o, k), &y))| (o, d.request.times[k], y))
        .collect()
}

/// The shortcut estimates of one dataset.
fn for_dataset(index: usize, d: &Dataset, model: &Model) -> Vec<ShortcutEstimate> {
    let parameter = d.diffusivity_parameter();
    let mut caveats = general_caveats(model);
    let obs = &d.request.observables;
    let make = |method: Method,
                value: std::result::Result<f64, String>,
                detail: Option<String>,
                assumptions: Vec<String>,
                caveats: Vec<String>| ShortcutEstimate {
        dataset: index,
        method,
        parameter,
        value,
        detail,
        assumptions,
        caveats,
    };
    let single_layer = model.geometry.layers.len() == 1;
    let thickness = model
        .geometry
        .layers
        .iter()
        .map(|l| l.thickness)
        .sum::<f64>();
    match obs.as_slice() {
        [Observable::Amount
        | Observable::AmountChange
        | Observable::Mean
        | Observable::FractionalUptake] => {
            if !single_layer || model.geometry.inner_radius > 0.0 {
                return Vec::new();
            }
            let Some((geometry, surface)) = uptake_geometry(model, thickness) else {
                return Vec::new();
            };
            if matches!(surface, EndCondition::Transfer { .. }) {
                caveats.push(
                    "the surface takes up through a transfer resistance, while the method assumes \
                     the surface reaches its final value at once: it underestimates D"
                        .into(),
                );
            }
            let mut rows = points(d);
            rows.sort_by(|a, b| a.1.total_cmp(&b.1));
            // Readings taken before the exposure began (at model time 0 after the shift by
            // `exposure_start`) are one baseline point: their mean at t = 0.
            let before = rows.iter().take_while(|r| r.1 <= 0.0).count();
            if before > 1 {
                let mean = rows[..before].iter().map(|r| r.2).sum::<f64>() / before as f64;
                rows.splice(..before, [(rows[0].0, 0.0, mean)]);
            }
            let t: Vec<f64> = rows.iter().map(|r| r.1).collect();
            let y: Vec<f64> = rows.iter().map(|r| r.2).collect();
            let baseline_known = d.offset_parameter().is_none()
                && matches!(
                    obs[0],
                    Observable::AmountChange | Observable::FractionalUptake
                );
            let (y0, base_note) = match baseline(&t, &y, baseline_known) {
                Ok(b) => b,
                Err(why) => {
                    return vec![make(Method::HalfTime, Err(why), None, Vec::new(), caveats)]
                }
            };
            let m: Vec<f64> = y.iter().map(|v| v - y0).collect();
            let plateau = Plateau::MeanOfLast((t.len() / 10).clamp(2, 5).min(t.len()));
            let mut out = Vec::new();
            match uptake::half_time(&t, &m, plateau, geometry) {
                Ok(e) => {
                    let mut a = e.assumptions;
                    a.extend(base_note.clone());
                    out.push(make(
                        Method::HalfTime,
                        Ok(e.d),
                        Some(format!("t_half = {} s", sig(e.t_half))),
                        a,
                        caveats.clone(),
                    ))
                }
                Err(err) => out.push(make(
                    Method::HalfTime,
                    Err(err.to_string()),
                    None,
                    Vec::new(),
                    caveats.clone(),
                )),
            }
            if let Geometry::Sheet { thickness, faces } = geometry {
                match uptake::initial_slope(&t, &m, plateau, thickness, faces, 0.5, false) {
                    Ok(e) => {
                        let mut a = e.assumptions;
                        a.extend(base_note);
                        out.push(make(
                            Method::InitialSlope,
                            Ok(e.d),
                            Some(format!(
                                "slope of M_t/M_inf against sqrt(t) = {} s^-1/2 over {} points",
                                sig(e.line.slope),
                                e.line.n
                            )),
                            a,
                            caveats,
                        ))
                    }
                    Err(err) => out.push(make(
                        Method::InitialSlope,
                        Err(err.to_string()),
                        None,
                        Vec::new(),
                        caveats,
                    )),
                }
            }
            out
        }
        [Observable::CumulativeOut(_) | Observable::CumulativeIn(_)] => {
            if model.geometry.shape != Shape::Slab || !single_layer {
                return Vec::new();
            }
            if d.offset_parameter().is_some() {
                caveats.push(
                    "the data carry a fitted offset; the time lag assumes the cumulative amount \
                     is zero at t = 0"
                        .into(),
                );
            }
            let mut rows = points(d);
            rows.sort_by(|a, b| a.1.total_cmp(&b.1));
            let t: Vec<f64> = rows.iter().map(|r| r.1).collect();
            let q: Vec<f64> = rows.iter().map(|r| r.2).collect();
            vec![match permeation::time_lag(&t, &q, thickness) {
                Ok(e) => {
                    caveats.extend(e.warnings);
                    make(
                        Method::TimeLag,
                        Ok(e.d),
                        Some(format!("time lag = {} s", sig(e.time_lag))),
                        e.assumptions,
                        caveats,
                    )
                }
                Err(err) => make(
                    Method::TimeLag,
                    Err(err.to_string()),
                    None,
                    Vec::new(),
                    caveats,
                ),
            }]
        }
        many if !many.is_empty() && many.iter().all(|o| matches!(o, Observable::ValueAt(_))) => {
            let positions: Vec<f64> = many
                .iter()
                .map(|o| match o {
                    Observable::ValueAt(x) => *x,
                    _ => f64::NAN,
                })
                .collect();
            if let Some((from_left, omega)) = periodic_end(model) {
                angstrom_rows(d, &positions, from_left, omega, thickness, caveats)
                    .into_iter()
                    .map(|(m, v, det, a, c)| make(m, v, det, a, c))
                    .collect()
            } else if model.geometry.shape == Shape::Slab
                && single_layer
                && looks_like_profiles(d, positions.len())
            {
                profile_rows(d, model, &positions, thickness, caveats)
                    .into_iter()
                    .map(|(m, v, det, a, c)| make(m, v, det, a, c))
                    .collect()
            } else {
                Vec::new()
            }
        }
        _ => Vec::new(),
    }
}

type Row = (
    Method,
    std::result::Result<f64, String>,
    Option<String>,
    Vec<String>,
    Vec<String>,
);

/// Four significant digits.
fn sig(x: f64) -> String {
    format!("{x:.4e}")
}

/// Departures from the ideal that every method shares.
fn general_caveats(model: &Model) -> Vec<String> {
    let mut c = Vec::new();
    if model.sources.exchange_rate != 0.0 {
        c.push("the model has a linear exchange (loss) term the method ignores".into());
    }
    if model.sources.reaction_rate != 0.0 {
        c.push("the model has a first-order uptake/reaction term the method ignores".into());
    }
    if model
        .geometry
        .layers
        .iter()
        .any(|l| !l.diffusivity.is_constant())
    {
        c.push("D depends on concentration in the model; the method gives an average D".into());
    }
    if let Initial::Table(_) = model.initial {
        c.push("the initial state is not uniform".into());
    }
    c
}

/// The uptake shortcut's geometry and the exposed end, when the run is an uptake experiment
/// (a step at the exposed face(s) from a uniform start; the other end sealed or a symmetry
/// centre).
fn uptake_geometry(model: &Model, thickness: f64) -> Option<(Geometry, EndCondition)> {
    let exposed = |e: &EndCondition| {
        matches!(
            e,
            EndCondition::Value(Signal::Constant(_))
                | EndCondition::Transfer {
                    outside: Signal::Constant(_),
                    ..
                }
        )
    };
    match model.geometry.shape {
        Shape::Slab => {
            let (l, r) = (&model.left, &model.right);
            match (exposed(l), exposed(r)) {
                (true, true) => Some((
                    Geometry::Sheet {
                        thickness,
                        faces: Faces::Both,
                    },
                    l.clone(),
                )),
                (true, false) if matches!(r, EndCondition::Sealed) => Some((
                    Geometry::Sheet {
                        thickness,
                        faces: Faces::OneSealed,
                    },
                    l.clone(),
                )),
                (false, true) if matches!(l, EndCondition::Sealed) => Some((
                    Geometry::Sheet {
                        thickness,
                        faces: Faces::OneSealed,
                    },
                    r.clone(),
                )),
                _ => None,
            }
        }
        Shape::Cylinder if exposed(&model.right) => Some((
            Geometry::Cylinder { radius: thickness },
            model.right.clone(),
        )),
        Shape::Sphere if exposed(&model.right) => {
            Some((Geometry::Sphere { radius: thickness }, model.right.clone()))
        }
        _ => None,
    }
}

/// The value of an uptake curve at t = 0: zero when the observable starts at zero by
/// definition; the first value when it was taken at t = 0; otherwise the straight line in
/// `√t` through the first points, extrapolated to t = 0.
fn baseline(t: &[f64], y: &[f64], zero: bool) -> std::result::Result<(f64, Vec<String>), String> {
    if zero {
        return Ok((0.0, Vec::new()));
    }
    if t.len() < 3 {
        return Err(format!(
            "{} point(s): too few to place the curve's start",
            t.len()
        ));
    }
    if t[0] <= 0.0 {
        return Ok((
            y[0],
            vec![format!("M_0 = {} (SI), the value at t = 0", sig(y[0]))],
        ));
    }
    let k = 3.min(t.len());
    let s: Vec<f64> = t[..k].iter().map(|v| v.sqrt()).collect();
    let line = fit_line(&s, &y[..k], None, false).map_err(|e| e.to_string())?;
    Ok((
        line.intercept,
        vec![format!(
            "M_0 = {} (SI), the first {k} points extrapolated to t = 0 along sqrt(t)",
            sig(line.intercept)
        )],
    ))
}

/// The end driven by a periodic signal: (true when it is the left end, angular frequency).
fn periodic_end(model: &Model) -> Option<(bool, f64)> {
    let period = |e: &EndCondition| match e {
        EndCondition::Value(Signal::Periodic { period, .. })
        | EndCondition::Flux(Signal::Periodic { period, .. })
        | EndCondition::Transfer {
            outside: Signal::Periodic { period, .. },
            ..
        } => Some(*period),
        _ => None,
    };
    let two_pi = 2.0 * std::f64::consts::PI;
    if let Some(p) = period(&model.left) {
        return Some((true, two_pi / p));
    }
    period(&model.right).map(|p| (false, two_pi / p))
}

/// Ångström's relation for every sensor pair of a periodically heated rod.
fn angstrom_rows(
    d: &Dataset,
    positions: &[f64],
    from_left: bool,
    omega: f64,
    length: f64,
    caveats: Vec<String>,
) -> Vec<Row> {
    let times = &d.request.times;
    let n_obs = positions.len();
    if n_obs < 2 {
        return Vec::new();
    }
    // Values per (observable, time); only times every sensor has are used.
    let mut grid = vec![vec![f64::NAN; times.len()]; n_obs];
    for ((o, k), &y) in d.outputs().zip(&d.observed) {
        grid[o][k] = y;
    }
    let period = 2.0 * std::f64::consts::PI / omega;
    let t_end = times.last().copied().unwrap_or(0.0);
    let keep_from = period.max(t_end / 3.0);
    let ks: Vec<usize> = (0..times.len())
        .filter(|&k| times[k] >= keep_from && grid.iter().all(|g| g[k].is_finite()))
        .collect();
    let t: Vec<f64> = ks.iter().map(|&k| times[k]).collect();
    let series: Vec<Vec<f64>> = grid
        .iter()
        .map(|g| ks.iter().map(|&k| g[k]).collect())
        .collect();
    let refs: Vec<&[f64]> = series.iter().map(Vec::as_slice).collect();
    let xs: Vec<f64> = positions
        .iter()
        .map(|&x| if from_left { x } else { length - x })
        .collect();
    let mut caveats = caveats;
    caveats.push(format!(
        "only the data from t = {} on are used (steady periodic state assumed)",
        seconds(keep_from)
    ));
    match angstrom::angstrom(&t, &xs, &refs, omega, Drift::Linear) {
        Ok(e) => {
            let mut c = caveats;
            c.extend(e.warnings.iter().cloned());
            e.pairs
                .iter()
                .map(|p| {
                    (
                        Method::Angstrom {
                            near: xs[p.near],
                            far: xs[p.far],
                        },
                        Ok(p.alpha),
                        Some(format!(
                            "amplitude ratio {:.4}, phase lag {:.4} rad",
                            p.amplitude_ratio, p.phase_lag
                        )),
                        e.assumptions.clone(),
                        c.clone(),
                    )
                })
                .collect()
        }
        Err(err) => vec![(
            Method::Angstrom {
                near: xs[0],
                far: xs[n_obs - 1],
            },
            Err(err.to_string()),
            None,
            Vec::new(),
            caveats,
        )],
    }
}

/// True for depth profiles (values at 3 or more positions at each of fewer times than
/// positions), as opposed to sensor records (few positions, many times).
fn looks_like_profiles(d: &Dataset, n_positions: usize) -> bool {
    let mut times: Vec<usize> = d.outputs().map(|m| m.1).collect();
    times.sort_unstable();
    times.dedup();
    n_positions >= 3 && times.len() <= n_positions
}

/// erfc (or Gaussian) linearisation of each profile time of a slab.
fn profile_rows(
    d: &Dataset,
    model: &Model,
    positions: &[f64],
    thickness: f64,
    caveats: Vec<String>,
) -> Vec<Row> {
    // The exposed face: the end with a value or a transfer condition, else (a deposit
    // spreading from a sealed face) the left one.
    let active =
        |e: &EndCondition| matches!(e, EndCondition::Value(_) | EndCondition::Transfer { .. });
    let (from_left, deposit) = if active(&model.left) {
        (true, false)
    } else if active(&model.right) {
        (false, false)
    } else {
        (true, matches!(model.initial, Initial::Table(_)))
    };
    let exposed = if from_left { &model.left } else { &model.right };
    let mut caveats = caveats;
    if matches!(exposed, EndCondition::Transfer { .. }) {
        caveats.push(
            "the surface takes up through a transfer resistance; the erfc profile assumes a \
             constant surface value"
                .into(),
        );
    }
    let constant = matches!(
        exposed,
        EndCondition::Value(Signal::Constant(_))
            | EndCondition::Transfer {
                outside: Signal::Constant(_),
                ..
            }
    );
    if !deposit && !constant {
        return Vec::new();
    }
    let mut by_time: std::collections::BTreeMap<usize, (Vec<f64>, Vec<f64>)> =
        std::collections::BTreeMap::new();
    for ((o, k), &y) in d.outputs().zip(&d.observed) {
        let x = positions[o];
        let depth = if from_left { x } else { thickness - x };
        let e = by_time.entry(k).or_default();
        e.0.push(depth);
        e.1.push(y);
    }
    let mut out = Vec::new();
    for (k, (x, u)) in by_time {
        let t = d.request.times[k];
        if x.len() < 3 || t <= 0.0 {
            continue;
        }
        if deposit {
            let method = Method::Gaussian { time: t };
            let mut c = caveats.clone();
            if d.offset_parameter().is_some() {
                c.push("the data carry a fitted offset (background) the Gaussian ignores".into());
            }
            out.push(match profile::gaussian_linearisation(&x, &u, t) {
                Ok(e) => (
                    method,
                    Ok(e.profile.d),
                    Some(format!("{} points used", e.profile.used.len())),
                    e.profile.assumptions,
                    c,
                ),
                Err(err) => (method, Err(err.to_string()), None, Vec::new(), c),
            });
        } else {
            let method = Method::Erfc { time: t };
            out.push(match profile::erfc_linearisation(&x, &u, t, None, None, None) {
                Ok(e) => {
                    let mut c = caveats.clone();
                    let reach = 4.0 * (e.d * t).sqrt();
                    if reach > thickness {
                        c.push(format!(
                            "the profile reaches the far face (4 sqrt(D t) = {} m > thickness {} m): \
                             the medium is not semi-infinite",
                            sig(reach),
                            sig(thickness)
                        ));
                    }
                    (
                        method,
                        Ok(e.d),
                        Some(format!("{} points used", e.used.len())),
                        e.assumptions,
                        c,
                    )
                }
                Err(err) => (method, Err(err.to_string()), None, Vec::new(), caveats.clone()),
            });
        }
    }
    out
}
