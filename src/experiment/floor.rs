//! Readings at or below an instrument's detection limit (`detection_limit` of a dataset).
//!
//! An instrument cannot tell a value below its detection limit y_L from one at it: deep points of
//! a depth profile that has fallen below the floor read the floor (or noise about it), not the
//! concentration. Fitted as if they were measurements, they pull the model's tail up to the floor
//! and bias D (high, for an in-diffusion profile; the more so with relative weighting, which
//! gives the small floor readings large weights). Two treatments:
//!
//! - **exclude**: the readings y_i ≤ y_L are left out of the fit;
//! - **censor**: they are kept as censored readings, the reading replaced by y_L; the model only
//!   has to stay at or below y_L there. Its residual is one-sided,
//!
//!   ```text
//!   r_i = 0                      when f_i ≤ y_L   (the model is below the floor: consistent)
//!   r_i = (y_L − f_i) / σ_i      when f_i > y_L   (the model rises above what was not seen)
//!   ```
//!
//!   a least-squares form of a left-censored observation (the Tobit idea: J. Tobin,
//!   Econometrica 26 (1958) 24 — from memory) that keeps the problem a sum of squares.
//!
//! A reading counts as below the limit when y_i ≤ y_L, so a value reported *at* the limit (a
//! common way of writing "< LOD") is below it too.

use crate::solver::Request;

/// What is done with readings at or below the detection limit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BelowLimit {
    /// Left out of the fit.
    Exclude,
    /// Kept, with a one-sided residual (zero while the model is at or below the limit).
    Censor,
}

impl BelowLimit {
    /// The word used in the experiment file and in report.json.
    pub fn word(self) -> &'static str {
        match self {
            BelowLimit::Exclude => "exclude",
            BelowLimit::Censor => "censor",
        }
    }
}

/// One reading at or below the limit.
#[derive(Debug, Clone, PartialEq)]
pub struct BelowLimitPoint {
    /// Line of the data file, from 1.
    pub line: u64,
    /// Time of the reading, s.
    pub time: f64,
    /// Position (depth) of the reading, m, where the observable has one.
    pub position: Option<f64>,
    /// The reading as found in the data file, SI of the measured column.
    pub reading: f64,
}

/// A dataset's detection limit and the readings it affected.
#[derive(Debug, Clone, PartialEq)]
pub struct DetectionLimit {
    /// The limit y_L, SI of the measured column.
    pub limit: f64,
    /// The treatment.
    pub treatment: BelowLimit,
    /// Every reading at or below the limit, in data order.
    pub points: Vec<BelowLimitPoint>,
    /// For `Censor`: per observed value of the dataset, true when it is a censored reading.
    /// Empty for `Exclude`.
    censored: Vec<bool>,
}

impl DetectionLimit {
    /// True when observed value `i` of the dataset is a censored reading.
    #[inline]
    pub fn is_censored(&self, i: usize) -> bool {
        self.censored.get(i).copied().unwrap_or(false)
    }

    /// The residual `(y − f)/w` of observed value `i`, one-sided for a censored reading (zero
    /// while the prediction `f` is at or below the limit `y`).
    #[inline]
    pub fn residual(&self, i: usize, observed: f64, predicted: f64, weight: f64) -> f64 {
        if self.is_censored(i) && predicted <= observed {
            0.0
        } else {
            (observed - predicted) / weight
        }
    }
}

/// The per-point vectors of a dataset that a detection limit filters, in data order.
pub(super) struct PointVectors<'a> {
    pub observed: &'a mut Vec<f64>,
    pub sigma: &'a mut Option<Vec<f64>>,
    pub lines: &'a mut Vec<u64>,
    pub positions: &'a mut Vec<Option<f64>>,
    pub map: &'a mut Vec<(usize, usize)>,
}

/// Find the readings at or below `limit` and apply `treatment`: remove them from every vector
/// (exclude) or replace the reading by the limit and mark it censored (censor).
pub(super) fn apply(
    limit: f64,
    treatment: BelowLimit,
    request: &Request,
    v: PointVectors<'_>,
) -> DetectionLimit {
    let n = v.observed.len();
    let below: Vec<bool> = v.observed.iter().map(|&y| y <= limit).collect();
    let points: Vec<BelowLimitPoint> = (0..n)
        .filter(|&i| below[i])
        .map(|i| BelowLimitPoint {
            line: v.lines.get(i).copied().unwrap_or(0),
            time: v
                .map
                .get(i)
                .and_then(|&(_, k)| request.times.get(k))
                .copied()
                .unwrap_or(f64::NAN),
            position: v.positions.get(i).copied().flatten(),
            reading: v.observed[i],
        })
        .collect();
    let censored = match treatment {
        BelowLimit::Exclude => {
            let keep = |i: &usize| !below[*i];
            fn filter<T: Clone>(x: &mut Vec<T>, keep: impl Fn(&usize) -> bool) {
                *x = x
                    .iter()
                    .enumerate()
                    .filter(|(i, _)| keep(i))
                    .map(|(_, t)| t.clone())
                    .collect();
            }
            filter(v.observed, keep);
            filter(v.lines, keep);
            filter(v.positions, keep);
            filter(v.map, keep);
            if let Some(s) = v.sigma.as_mut() {
                filter(s, keep);
            }
            Vec::new()
        }
        BelowLimit::Censor => {
            for (y, &b) in v.observed.iter_mut().zip(&below) {
                if b {
                    *y = limit;
                }
            }
            below
        }
    };
    DetectionLimit {
        limit,
        treatment,
        points,
        censored,
    }
}
