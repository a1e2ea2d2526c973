//! Values that may change with time: a constant, or a table interpolated linearly.

use crate::error::{Error, Result};

/// A quantity that is constant or given as a time table (t in s, value in the quantity's SI
/// unit). Between table rows the value is interpolated linearly; before the first row and after
/// the last it is held at the first or last value.
#[derive(Debug, Clone, PartialEq)]
pub enum Signal {
    /// The same value at every time.
    Constant(f64),
    /// Rows of (time in s, value), times strictly increasing.
    Table(Vec<(f64, f64)>),
    /// mean + amplitude · sin(2π t / period + phase): a periodically modulated heater or bath.
    Periodic {
        /// Mean value.
        mean: f64,
        /// Amplitude (same unit as the mean).
        amplitude: f64,
        /// Period, s.
        period: f64,
        /// Phase at t = 0, rad.
        phase: f64,
    },
}

impl Signal {
    /// The value at time `t` (s).
    #[inline]
    pub fn at(&self, t: f64) -> f64 {
        match self {
            Signal::Constant(v) => *v,
            Signal::Table(rows) => interpolate(rows, t),
            Signal::Periodic {
                mean,
                amplitude,
                period,
                phase,
            } => mean + amplitude * (std::f64::consts::TAU * t / period + phase).sin(),
        }
    }

    /// The times at which a table's slope changes (its rows), so a time stepper can land on them.
    pub fn breakpoints(&self) -> &[(f64, f64)] {
        match self {
            Signal::Constant(_) | Signal::Periodic { .. } => &[],
            Signal::Table(rows) => rows,
        }
    }

    /// The largest |value| the signal takes.
    pub fn max_abs(&self) -> f64 {
        match self {
            Signal::Constant(v) => v.abs(),
            Signal::Table(rows) => rows.iter().fold(0.0, |m, r| m.max(r.1.abs())),
            Signal::Periodic {
                mean, amplitude, ..
            } => mean.abs() + amplitude.abs(),
        }
    }

    /// The smallest and largest value the signal takes.
    pub fn range(&self) -> (f64, f64) {
        match self {
            Signal::Constant(v) => (*v, *v),
            Signal::Table(rows) => rows
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), r| {
                    (a.min(r.1), b.max(r.1))
                }),
            Signal::Periodic {
                mean, amplitude, ..
            } => (mean - amplitude.abs(), mean + amplitude.abs()),
        }
    }

    /// Check finite values and increasing times; `name` names the setting.
    pub fn validate(&self, name: &str) -> Result<()> {
        match self {
            Signal::Constant(v) => {
                if !v.is_finite() {
                    return Err(Error::setting(
                        name,
                        format!("value must be finite, found {v}"),
                    ));
                }
            }
            Signal::Periodic {
                mean,
                amplitude,
                period,
                phase,
            } => {
                if !(mean.is_finite() && amplitude.is_finite() && phase.is_finite()) {
                    return Err(Error::setting(
                        name,
                        "mean, amplitude and phase must be finite",
                    ));
                }
                if !(period.is_finite() && *period > 0.0) {
                    return Err(Error::setting(
                        format!("{name}.period"),
                        format!("must be a positive time in s, found {period}"),
                    ));
                }
            }
            Signal::Table(rows) => {
                if rows.is_empty() {
                    return Err(Error::setting(name, "time table has no rows"));
                }
                for (i, &(t, v)) in rows.iter().enumerate() {
                    if !t.is_finite() || !v.is_finite() {
                        return Err(Error::setting(
                            name,
                            format!(
                                "row {}: time and value must be finite, found ({t}, {v})",
                                i + 1
                            ),
                        ));
                    }
                    if i > 0 && t <= rows[i - 1].0 {
                        return Err(Error::setting(
                            name,
                            format!(
                                "row {}: times must increase, found {t} s after {} s",
                                i + 1,
                                rows[i - 1].0
                            ),
                        ));
                    }
                }
            }
        }
        Ok(())
    }
}

/// Linear interpolation in sorted rows of (x, y), held constant outside the range.
pub(crate) fn interpolate(rows: &[(f64, f64)], x: f64) -> f64 {
    match rows {
        [] => 0.0,
        [only] => only.1,
        _ => {
            let first = rows[0];
            let last = rows[rows.len() - 1];
            if x <= first.0 {
                return first.1;
            }
            if x >= last.0 {
                return last.1;
            }
            // First row with abscissa > x; 1 ≤ k ≤ len − 1 here.
            let k = rows.partition_point(|r| r.0 <= x);
            let (x0, y0) = rows[k - 1];
            let (x1, y1) = rows[k];
            y0 + (y1 - y0) * (x - x0) / (x1 - x0)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_interpolates_and_holds_ends() {
        let s = Signal::Table(vec![(0.0, 1.0), (10.0, 3.0), (20.0, 3.0)]);
        assert_eq!(s.at(-5.0), 1.0);
        assert_eq!(s.at(5.0), 2.0);
        assert_eq!(s.at(10.0), 3.0);
        assert_eq!(s.at(99.0), 3.0);
        assert!(s.validate("heater").is_ok());
    }

    #[test]
    fn rejects_unsorted_table() {
        let s = Signal::Table(vec![(0.0, 1.0), (0.0, 3.0)]);
        let e = s.validate("ends.left.value").unwrap_err().to_string();
        assert!(e.contains("ends.left.value") && e.contains("row 2"), "{e}");
    }
}
