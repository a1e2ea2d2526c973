//! Loading measurements from CSV files into SI vectors, with exact error locations.
//!
//! Three shapes are read:
//!
//! * [`TimeSeries`] — time + one value column (mass uptake, a normalised signal), optional
//!   uncertainty column, optional run column splitting one file into several series
//!   ([`read_time_series`]);
//! * [`SensorTable`] — time + one column per sensor at a position the caller supplies
//!   (thermocouples along a heated rod) ([`read_sensor_table`]);
//! * [`Profiles`] — position + value, grouped by a time column or at one time given by the
//!   caller (concentration depth profiles) ([`read_profiles`]).
//!
//! **File format.** A header row is required (the first row that is not a `#` comment or
//! blank); its cells name the columns with an optional unit in brackets, `time [min]`,
//! `x [um]`, `T (degC)` (see [`crate::units`]). The delimiter (comma, semicolon, tab) is
//! detected from the header row unless given. Lines starting with `#` are comments anywhere
//! in the file. A UTF-8 byte-order mark, CRLF and CR-only line endings, blank lines, rows of
//! delimiters only and a trailing delimiter are accepted. Cells may be quoted (RFC 4180); a
//! quote that is never closed is an [`InputKind::Syntax`] error. UTF-16 text is an
//! [`InputKind::Encoding`] error. Semicolon- or tab-separated files may use a decimal comma
//! ([`ReadOptions::decimal_comma`]).
//!
//! **Columns** are picked by header name, ignoring case, matching either the name part
//! (without the unit) or the whole cell. Values are converted to SI with the header unit or
//! the caller's override ([`ColumnSpec::unit`]). Times and positions must carry a unit.
//! Uncertainties are converted as differences (`1 degC` of σ is `1 K`); without a unit of
//! their own they take the unit of their value column.
//!
//! **Time origin.** With [`ReadOptions::time_origin`] `= Some(t0)` (s, on the file's clock),
//! rows with `t < t0` are returned as baseline rows and every time is shifted by `−t0`, so the
//! step change is at `t = 0` (baseline times are therefore negative). Without it, a negative
//! time is an [`InputKind::NegativeTime`] error.
//!
//! **Errors** are [`Error::Input`] with an [`InputKind`] and a [`Location`] naming file, line
//! (from 1) and column (by its header text). **Warnings** ([`Warning`]) for irregular sampling
//! and isolated outliers are returned with the data; their rules are documented in
//! [`checks`].
//!
//! References: RFC 4180 (CSV, quoting) — from memory; the `csv` crate does the tokenising.

pub mod checks;
mod table;
pub use table::read_header_units;

use std::collections::HashMap;
use std::fs::File;
use std::io::Read;
use std::path::{Path, PathBuf};

use crate::error::{Error, InputKind, Location, Result};
use crate::units::{Quantity, Unit};

use table::{read_table, CellCheck, Header, Request};

/// A column chosen by header name, with an optional unit that overrides the header's.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnSpec {
    /// The header name (the part before the bracketed unit, or the whole cell); case is
    /// ignored.
    pub name: String,
    /// A unit to use instead of the header unit (for files whose header has none or a wrong
    /// one). [`Unit::arbitrary`] declares a unit fickfit does not convert.
    pub unit: Option<Unit>,
}

impl ColumnSpec {
    /// A column by name, unit from the header.
    pub fn new(name: impl Into<String>) -> Self {
        ColumnSpec {
            name: name.into(),
            unit: None,
        }
    }

    /// This column with a unit override.
    pub fn with_unit(mut self, unit: Unit) -> Self {
        self.unit = Some(unit);
        self
    }
}

/// Options common to every shape.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ReadOptions {
    /// The delimiter byte (`b','`, `b';'`, `b'\t'`); `None` detects it from the header row.
    pub delimiter: Option<u8>,
    /// Numbers use a decimal comma (`1,5` = 1.5). Only for semicolon- or tab-separated files.
    pub decimal_comma: bool,
    /// Time of the step change t0 on the file's clock, s. Rows with `t < t0` become baseline
    /// rows; all times are returned as `t − t0`. `None`: no shift, negative times are errors.
    pub time_origin: Option<f64>,
    /// Fewer points than this in a series, sensor table or profile (baseline rows not
    /// counted) is an [`InputKind::TooFewPoints`] error. 0 means no minimum.
    pub min_points: usize,
    /// The sample spans `[lo, hi]` in m; a position outside is an
    /// [`InputKind::PositionOutside`] error. `None`: not checked.
    pub sample_extent: Option<(f64, f64)>,
}

/// What a [`Warning`] is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum WarningKind {
    /// Time steps vary by more than [`checks::IRREGULAR_STEP_RATIO`].
    IrregularSampling,
    /// A point far from its neighbours ([`checks::OUTLIER_SIGMAS`] robust σ).
    Outlier,
    /// Rows before the time origin: kept as the baseline, not fitted.
    Baseline,
}

/// A plausibility warning: the data were loaded, but the user may want to look.
#[derive(Debug, Clone, PartialEq)]
pub struct Warning {
    /// What it is about.
    pub kind: WarningKind,
    /// Where.
    pub location: Location,
    /// What was found, in plain words.
    pub message: String,
}

/// Loaded data with the warnings found while loading.
#[derive(Debug, Clone, PartialEq)]
pub struct Loaded<T> {
    /// The data, SI units.
    pub data: T,
    /// Plausibility warnings (never errors).
    pub warnings: Vec<Warning>,
    /// The file, as the caller named it.
    pub file: PathBuf,
}

// ---------------------------------------------------------------------------------------------
// Time series

/// Columns of a time-series file.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesColumns {
    /// The time column (a time unit is required).
    pub time: ColumnSpec,
    /// The measured value (mass, amount, concentration, signal...).
    pub value: ColumnSpec,
    /// Optional standard uncertainty of the value (same kind as the value; must be > 0).
    pub sigma: Option<ColumnSpec>,
    /// Optional run/series column: rows with the same label form one series.
    pub run: Option<String>,
}

impl SeriesColumns {
    /// Time and value columns by name, no uncertainty, no run column.
    pub fn new(time: impl Into<String>, value: impl Into<String>) -> Self {
        SeriesColumns {
            time: ColumnSpec::new(time),
            value: ColumnSpec::new(value),
            sigma: None,
            run: None,
        }
    }
}

/// Rows before the time origin, kept aside (times already shifted, so negative).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Baseline {
    /// Time relative to the step, s (< 0).
    pub time: Vec<f64>,
    /// Value, SI.
    pub value: Vec<f64>,
    /// Standard uncertainty, SI, when the file has one.
    pub sigma: Option<Vec<f64>>,
    /// File line of each row (from 1).
    pub line: Vec<u64>,
}

/// One measured series `y(t)`, SI units, times since the step change.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeSeries {
    /// The run label from the run column, or `None` when the file is one series.
    pub run: Option<String>,
    /// Time since the step change, s, strictly increasing.
    pub time: Vec<f64>,
    /// Value, SI (kg, mol, K, or the plain number for dimensionless/arbitrary units).
    pub value: Vec<f64>,
    /// Standard uncertainty of each value, SI, when the file has an uncertainty column.
    pub sigma: Option<Vec<f64>>,
    /// File line of each point (from 1), for later messages.
    pub line: Vec<u64>,
    /// The unit the value column was written in (for reports: [`Unit::from_si`]).
    pub value_unit: Unit,
    /// The value column's header text.
    pub value_column: String,
    /// Rows before the time origin.
    pub baseline: Baseline,
}

/// Read a time series (or several, with a run column) from a CSV file.
///
/// Checks: times finite and, without a time origin, ≥ 0; strictly increasing within each
/// series (a repeated row is [`InputKind::DuplicateRow`], any other non-increase
/// [`InputKind::TimeNotIncreasing`], both naming the two lines); uncertainties > 0; at least
/// [`ReadOptions::min_points`] points per series. Series are returned in order of first
/// appearance of their run label.
pub fn read_time_series(
    path: impl AsRef<Path>,
    cols: &SeriesColumns,
    opts: &ReadOptions,
) -> Result<Loaded<Vec<TimeSeries>>> {
    let path = path.as_ref();
    read_time_series_from(open(path)?, path, cols, opts)
}

/// [`read_time_series`] from any byte stream; `name` is used in locations.
pub fn read_time_series_from<R: Read>(
    src: R,
    name: impl AsRef<Path>,
    cols: &SeriesColumns,
    opts: &ReadOptions,
) -> Result<Loaded<Vec<TimeSeries>>> {
    let name = name.as_ref();
    let mut info = SeriesPlan::default();
    let (header, mut c) = read_table(src, name, opts, |h| {
        let t = h.find(&cols.time.name)?;
        let tu = h.unit(t, &cols.time, Some(Quantity::Time))?;
        let v = h.find(&cols.value.name)?;
        let vu = h.unit(v, &cols.value, None)?;
        let mut req = vec![time_request(t, tu.clone(), opts), number(v, vu.clone())];
        if let Some(s) = &cols.sigma {
            let si = h.find(&s.name)?;
            let su = sigma_unit(h, si, s, &vu)?;
            req.push(Request::Number {
                col: si,
                unit: su,
                diff: true,
                check: CellCheck::Positive,
            });
        }
        if let Some(r) = &cols.run {
            let ri = h.find(r)?;
            req.push(Request::Label { col: ri });
        }
        info.time = t;
        info.value = v;
        info.time_unit = Some(tu);
        info.value_unit = Some(vu);
        Ok(req)
    })?;
    let t0 = opts.time_origin.unwrap_or(0.0);
    let mut nums = std::mem::take(&mut c.numbers).into_iter();
    let time = nums.next().unwrap_or_default();
    let value = nums.next().unwrap_or_default();
    let sigma = nums.next();
    let value_unit = info.value_unit.clone().unwrap_or_else(Unit::none);
    let time_unit = info
        .time_unit
        .clone()
        .unwrap_or_else(|| Unit::si(Quantity::Time));
    let value_column = header
        .cols
        .get(info.value)
        .map(|c| c.text.clone())
        .unwrap_or_default();

    if c.lines.is_empty() {
        return Err(Error::input(
            InputKind::Empty,
            Location::file(name).with_line(header.line),
            "the file has a header but no data rows; check that the right file is named",
        ));
    }
    // Split rows by run. Without a run column the column vectors are moved, not copied.
    let lines = std::mem::take(&mut c.lines);
    let parts: Vec<Part> = match (c.labels.first(), c.label_names.first()) {
        (Some(ids), Some(names)) => {
            let mut parts: Vec<Part> = names
                .iter()
                .map(|n| Part {
                    run: Some(n.clone()),
                    time: Vec::new(),
                    value: Vec::new(),
                    sigma: sigma.as_ref().map(|_| Vec::new()),
                    line: Vec::new(),
                })
                .collect();
            for (row, &id) in ids.iter().enumerate() {
                let (Some(p), Some(&t), Some(&v), Some(&l)) = (
                    parts.get_mut(id as usize),
                    time.get(row),
                    value.get(row),
                    lines.get(row),
                ) else {
                    return Err(Error::Internal("run index out of range".into()));
                };
                p.time.push(t);
                p.value.push(v);
                if let (Some(ps), Some(s)) =
                    (p.sigma.as_mut(), sigma.as_ref().and_then(|s| s.get(row)))
                {
                    ps.push(*s);
                }
                p.line.push(l);
            }
            parts
        }
        _ => vec![Part {
            run: None,
            time,
            value,
            sigma,
            line: lines,
        }],
    };

    let mut out = Vec::with_capacity(parts.len());
    let mut warnings = Vec::new();
    for p in parts {
        let what = match &p.run {
            Some(r) => format!("run '{r}'"),
            None => "series".to_string(),
        };
        check_increasing(
            &p.time,
            &[&p.value],
            p.sigma.as_deref(),
            &p.line,
            &header,
            info.time,
            &time_unit,
            &what,
        )?;
        let Part {
            run,
            mut time,
            mut value,
            mut sigma,
            mut line,
        } = p;
        // Times increase, so the baseline rows (t < t0) come first.
        let split = match opts.time_origin {
            Some(t0) => time.partition_point(|&t| t < t0),
            None => 0,
        };
        let mut baseline = Baseline {
            time: time.drain(..split).collect(),
            value: value.drain(..split).collect(),
            sigma: sigma
                .as_mut()
                .map(|s| s.drain(..split.min(s.len())).collect()),
            line: line.drain(..split).collect(),
        };
        for t in time.iter_mut().chain(baseline.time.iter_mut()) {
            *t -= t0;
        }
        let ts = TimeSeries {
            run,
            time,
            value,
            sigma,
            line,
            value_unit: value_unit.clone(),
            value_column: value_column.clone(),
            baseline,
        };
        if ts.time.len() < opts.min_points {
            return Err(Error::input(
                InputKind::TooFewPoints,
                Location::file(name).with_column(value_column.clone()),
                format!(
                    "{what} has {} points{} but at least {} are needed; add measurements or \
                     lower the minimum",
                    ts.time.len(),
                    if ts.baseline.time.is_empty() {
                        String::new()
                    } else {
                        format!(
                            " after the time origin ({} baseline rows)",
                            ts.baseline.time.len()
                        )
                    },
                    opts.min_points
                ),
            ));
        }
        let loc = |i: usize| header.cell(ts.line.get(i).copied().unwrap_or(0), info.time);
        warnings.extend(checks::irregular_sampling(&ts.time, &loc, &what));
        let vloc = |i: usize| header.cell(ts.line.get(i).copied().unwrap_or(0), info.value);
        let show = |i: usize| {
            let v = ts.value.get(i).copied().unwrap_or(f64::NAN);
            format!("{} {}", value_unit.from_si(v), value_unit.label())
        };
        warnings.extend(checks::outliers(&ts.time, &ts.value, &vloc, &show, &what));
        out.push(ts);
    }
    Ok(Loaded {
        data: out,
        warnings,
        file: name.to_path_buf(),
    })
}

/// One series' columns before the time origin is applied.
struct Part {
    run: Option<String>,
    time: Vec<f64>,
    value: Vec<f64>,
    sigma: Option<Vec<f64>>,
    line: Vec<u64>,
}

#[derive(Default)]
struct SeriesPlan {
    time: usize,
    value: usize,
    time_unit: Option<Unit>,
    value_unit: Option<Unit>,
}

// ---------------------------------------------------------------------------------------------
// Sensor table

/// One sensor column and where the sensor sits.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorSpec {
    /// The sensor's column.
    pub column: ColumnSpec,
    /// Its position along the sample, m. `None` is an [`InputKind::SensorWithoutPosition`]
    /// error (kept optional so a caller can pass through what the user wrote).
    pub position: Option<f64>,
}

/// Columns of a sensor table.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorColumns {
    /// The time column (a time unit is required).
    pub time: ColumnSpec,
    /// The sensor columns with their positions. Empty: every column except the time column
    /// is a sensor, and since none then has a position the load fails with
    /// [`InputKind::SensorWithoutPosition`] naming the first one.
    pub sensors: Vec<SensorSpec>,
}

/// One sensor's readings.
#[derive(Debug, Clone, PartialEq)]
pub struct Sensor {
    /// The column's header text.
    pub column: String,
    /// Position along the sample, m.
    pub position: f64,
    /// Readings at [`SensorTable::time`], SI (K for temperatures).
    pub value: Vec<f64>,
    /// Readings at [`SensorTable::baseline_time`], SI.
    pub baseline_value: Vec<f64>,
    /// The unit the column was written in.
    pub unit: Unit,
}

/// Readings of several sensors on one time axis, SI units.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorTable {
    /// Time since the step change, s, strictly increasing.
    pub time: Vec<f64>,
    /// File line of each row (from 1).
    pub line: Vec<u64>,
    /// The sensors, in the caller's order.
    pub sensors: Vec<Sensor>,
    /// Times of the rows before the time origin, s (< 0).
    pub baseline_time: Vec<f64>,
    /// File lines of the baseline rows.
    pub baseline_line: Vec<u64>,
}

/// Read a table of sensor readings: time + one column per sensor.
///
/// Checks as for [`read_time_series`] (times, increase, duplicates, minimum rows), plus every
/// sensor must have a position, inside [`ReadOptions::sample_extent`] when given.
pub fn read_sensor_table(
    path: impl AsRef<Path>,
    cols: &SensorColumns,
    opts: &ReadOptions,
) -> Result<Loaded<SensorTable>> {
    let path = path.as_ref();
    read_sensor_table_from(open(path)?, path, cols, opts)
}

/// [`read_sensor_table`] from any byte stream; `name` is used in locations.
pub fn read_sensor_table_from<R: Read>(
    src: R,
    name: impl AsRef<Path>,
    cols: &SensorColumns,
    opts: &ReadOptions,
) -> Result<Loaded<SensorTable>> {
    let name = name.as_ref();
    let mut plan: Vec<(usize, f64, Unit)> = Vec::new();
    let mut tcol = 0usize;
    let mut tunit = Unit::si(Quantity::Time);
    let (header, mut c) = read_table(src, name, opts, |h| {
        tcol = h.find(&cols.time.name)?;
        tunit = h.unit(tcol, &cols.time, Some(Quantity::Time))?;
        let specs: Vec<SensorSpec> = if cols.sensors.is_empty() {
            h.cols
                .iter()
                .enumerate()
                .filter(|(i, _)| *i != tcol)
                .map(|(_, c)| SensorSpec {
                    column: ColumnSpec::new(c.text.clone()),
                    position: None,
                })
                .collect()
        } else {
            cols.sensors.clone()
        };
        if specs.is_empty() {
            return Err(Error::input(
                InputKind::UnknownColumn,
                Location::file(name).with_line(h.line),
                format!(
                    "the file has no sensor column besides the time column; the columns \
                     present are {}",
                    h.list()
                ),
            ));
        }
        let mut req = vec![time_request(tcol, tunit.clone(), opts)];
        for s in &specs {
            let col = h.find(&s.column.name)?;
            let Some(pos) = s.position else {
                return Err(Error::input(
                    InputKind::SensorWithoutPosition,
                    h.loc(col),
                    "this column is read as a sensor, but no position was given for it; give \
                     its position along the sample, or leave the column out",
                ));
            };
            if !pos.is_finite()
                || opts
                    .sample_extent
                    .is_some_and(|(lo, hi)| pos < lo || pos > hi)
            {
                let (lo, hi) = opts.sample_extent.unwrap_or((0.0, 0.0));
                return Err(Error::input(
                    InputKind::PositionOutside,
                    h.loc(col),
                    format!(
                        "the position given for this sensor, {pos:e} m, lies outside the \
                         sample ({lo:e} m to {hi:e} m); check the position and its unit"
                    ),
                ));
            }
            let unit = h.unit(col, &s.column, None)?;
            req.push(number(col, unit.clone()));
            plan.push((col, pos, unit));
        }
        Ok(req)
    })?;
    if c.lines.is_empty() {
        return Err(Error::input(
            InputKind::Empty,
            Location::file(name).with_line(header.line),
            "the file has a header but no data rows; check that the right file is named",
        ));
    }
    let mut nums = std::mem::take(&mut c.numbers).into_iter();
    let time = nums.next().unwrap_or_default();
    let values: Vec<Vec<f64>> = nums.collect();
    let vrefs: Vec<&[f64]> = values.iter().map(Vec::as_slice).collect();
    check_increasing(
        &time, &vrefs, None, &c.lines, &header, tcol, &tunit, "table",
    )?;

    let t0 = opts.time_origin.unwrap_or(0.0);
    let split = if opts.time_origin.is_some() {
        time.partition_point(|&t| t < t0)
    } else {
        0
    };
    let mut time = time;
    let mut line = std::mem::take(&mut c.lines);
    let mut baseline_time: Vec<f64> = time.drain(..split).collect();
    let baseline_line: Vec<u64> = line.drain(..split).collect();
    for t in time.iter_mut().chain(baseline_time.iter_mut()) {
        *t -= t0;
    }
    let mut table = SensorTable {
        time,
        line,
        sensors: Vec::with_capacity(plan.len()),
        baseline_time,
        baseline_line,
    };
    if table.time.len() < opts.min_points {
        return Err(Error::input(
            InputKind::TooFewPoints,
            Location::file(name),
            format!(
                "the table has {} rows after the time origin but at least {} are needed; add \
                 measurements or lower the minimum",
                table.time.len(),
                opts.min_points
            ),
        ));
    }
    let mut warnings = Vec::new();
    let loc = |i: usize| header.cell(table.line.get(i).copied().unwrap_or(0), tcol);
    warnings.extend(checks::irregular_sampling(&table.time, &loc, "table"));
    for ((col, position, unit), mut v) in plan.into_iter().zip(values) {
        let baseline_value: Vec<f64> = v.drain(..split).collect();
        let main = v;
        let column = header
            .cols
            .get(col)
            .map(|c| c.text.clone())
            .unwrap_or_default();
        let what = format!("sensor '{column}'");
        let vloc = |i: usize| header.cell(table.line.get(i).copied().unwrap_or(0), col);
        let show = |i: usize| {
            let x = main.get(i).copied().unwrap_or(f64::NAN);
            format!("{} {}", unit.from_si(x), unit.label())
        };
        warnings.extend(checks::outliers(&table.time, &main, &vloc, &show, &what));
        table.sensors.push(Sensor {
            column,
            position,
            value: main,
            baseline_value,
            unit,
        });
    }
    Ok(Loaded {
        data: table,
        warnings,
        file: name.to_path_buf(),
    })
}

// ---------------------------------------------------------------------------------------------
// Profiles

/// Where a profile's time comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum ProfileTime {
    /// A time column: rows with the same time form one profile. Shifted by the time origin.
    Column(ColumnSpec),
    /// One time for the whole file, s since the step change (the time origin is not applied).
    Fixed(f64),
}

/// Columns of a profile file.
#[derive(Debug, Clone, PartialEq)]
pub struct ProfileColumns {
    /// The position column (a length unit is required).
    pub position: ColumnSpec,
    /// The measured value (concentration, signal...).
    pub value: ColumnSpec,
    /// Optional standard uncertainty of the value (must be > 0).
    pub sigma: Option<ColumnSpec>,
    /// The profile time.
    pub time: ProfileTime,
}

/// One profile `y(x)` at one time, SI units, in file order.
#[derive(Debug, Clone, PartialEq)]
pub struct Profile {
    /// Time since the step change, s.
    pub time: f64,
    /// Position, m.
    pub position: Vec<f64>,
    /// Value, SI.
    pub value: Vec<f64>,
    /// Standard uncertainty, SI, when the file has an uncertainty column.
    pub sigma: Option<Vec<f64>>,
    /// File line of each point (from 1).
    pub line: Vec<u64>,
    /// The unit the value column was written in.
    pub value_unit: Unit,
}

/// Profiles read from one file.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Profiles {
    /// Profiles at or after the step change, in order of first appearance.
    pub profiles: Vec<Profile>,
    /// Profiles measured before the time origin (negative times).
    pub baseline: Vec<Profile>,
}

/// Read concentration (or other) profiles: position + value, with a time column or one time
/// for the whole file.
///
/// Checks: positions inside [`ReadOptions::sample_extent`] when given; uncertainties > 0;
/// a repeated row (same time, position, value and uncertainty) is
/// [`InputKind::DuplicateRow`]; with a time column and no time origin, times ≥ 0; at least
/// [`ReadOptions::min_points`] points per profile. Positions need not be sorted.
pub fn read_profiles(
    path: impl AsRef<Path>,
    cols: &ProfileColumns,
    opts: &ReadOptions,
) -> Result<Loaded<Profiles>> {
    let path = path.as_ref();
    read_profiles_from(open(path)?, path, cols, opts)
}

/// [`read_profiles`] from any byte stream; `name` is used in locations.
pub fn read_profiles_from<R: Read>(
    src: R,
    name: impl AsRef<Path>,
    cols: &ProfileColumns,
    opts: &ReadOptions,
) -> Result<Loaded<Profiles>> {
    let name = name.as_ref();
    if let ProfileTime::Fixed(t) = cols.time {
        if !(t.is_finite() && t >= 0.0) {
            return Err(Error::setting(
                "profile time",
                format!("the time of the profile must be a finite number ≥ 0 s, found {t}"),
            ));
        }
    }
    let (mut pcol, mut vcol, mut tcol) = (0usize, 0usize, None);
    let mut vunit = Unit::none();
    let mut has_sigma = false;
    let (header, mut c) = read_table(src, name, opts, |h| {
        pcol = h.find(&cols.position.name)?;
        let pu = h.unit(pcol, &cols.position, Some(Quantity::Length))?;
        vcol = h.find(&cols.value.name)?;
        vunit = h.unit(vcol, &cols.value, None)?;
        let check = match opts.sample_extent {
            Some((lo, hi)) => CellCheck::Within(lo, hi),
            None => CellCheck::None,
        };
        let mut req = vec![
            Request::Number {
                col: pcol,
                unit: pu,
                diff: false,
                check,
            },
            number(vcol, vunit.clone()),
        ];
        if let Some(s) = &cols.sigma {
            let si = h.find(&s.name)?;
            let su = sigma_unit(h, si, s, &vunit)?;
            req.push(Request::Number {
                col: si,
                unit: su,
                diff: true,
                check: CellCheck::Positive,
            });
            has_sigma = true;
        }
        if let ProfileTime::Column(spec) = &cols.time {
            let ti = h.find(&spec.name)?;
            let tu = h.unit(ti, spec, Some(Quantity::Time))?;
            req.push(time_request(ti, tu, opts));
            tcol = Some(ti);
        }
        Ok(req)
    })?;
    if c.lines.is_empty() {
        return Err(Error::input(
            InputKind::Empty,
            Location::file(name).with_line(header.line),
            "the file has a header but no data rows; check that the right file is named",
        ));
    }
    let mut nums = std::mem::take(&mut c.numbers).into_iter();
    let pos = nums.next().unwrap_or_default();
    let val = nums.next().unwrap_or_default();
    let sig = if has_sigma { nums.next() } else { None };
    let tim = if tcol.is_some() { nums.next() } else { None };

    // Group by time (exact equality of the converted value).
    let mut groups: Vec<(f64, Vec<usize>)> = Vec::new();
    let mut index: HashMap<u64, usize> = HashMap::new();
    for row in 0..c.lines.len() {
        let t = match (&tim, &cols.time) {
            (Some(t), _) => t.get(row).copied().unwrap_or(0.0),
            (None, ProfileTime::Fixed(t)) => *t,
            (None, ProfileTime::Column(_)) => 0.0,
        };
        let key = (t + 0.0).to_bits(); // +0.0 folds −0 into 0
        let g = *index.entry(key).or_insert_with(|| {
            groups.push((t, Vec::new()));
            groups.len() - 1
        });
        if let Some((_, rows)) = groups.get_mut(g) {
            rows.push(row);
        }
    }

    let mut out = Profiles::default();
    let mut warnings = Vec::new();
    let shift = if tcol.is_some() {
        opts.time_origin
    } else {
        None
    };
    for (t, rows) in groups {
        // Duplicate rows: sort by (position, value, sigma) and compare neighbours.
        let key = |r: usize| {
            (
                pos.get(r).copied().unwrap_or(0.0),
                val.get(r).copied().unwrap_or(0.0),
                sig.as_ref().and_then(|s| s.get(r).copied()).unwrap_or(0.0),
            )
        };
        let mut sorted = rows.clone();
        sorted.sort_by(|&a, &b| {
            let (ka, kb) = (key(a), key(b));
            ka.0.total_cmp(&kb.0)
                .then(ka.1.total_cmp(&kb.1))
                .then(ka.2.total_cmp(&kb.2))
        });
        for w in sorted.windows(2) {
            if let [a, b] = *w {
                if key(a) == key(b) {
                    let (la, lb) = (
                        c.lines.get(a).copied().unwrap_or(0),
                        c.lines.get(b).copied().unwrap_or(0),
                    );
                    let (first, second) = (la.min(lb), la.max(lb));
                    return Err(Error::input(
                        InputKind::DuplicateRow,
                        header.cell(second, pcol),
                        format!(
                            "line {second} repeats line {first} (same time, position and \
                             value); delete one of them"
                        ),
                    ));
                }
            }
        }
        let time = match shift {
            Some(t0) => t - t0,
            None => t,
        };
        let profile = Profile {
            time,
            position: rows.iter().filter_map(|&r| pos.get(r).copied()).collect(),
            value: rows.iter().filter_map(|&r| val.get(r).copied()).collect(),
            sigma: sig
                .as_ref()
                .map(|s| rows.iter().filter_map(|&r| s.get(r).copied()).collect()),
            line: rows
                .iter()
                .filter_map(|&r| c.lines.get(r).copied())
                .collect(),
            value_unit: vunit.clone(),
        };
        if time < 0.0 {
            out.baseline.push(profile);
            continue;
        }
        let what = format!("profile at t = {time} s");
        if profile.position.len() < opts.min_points {
            return Err(Error::input(
                InputKind::TooFewPoints,
                Location::file(name).with_column(
                    header
                        .cols
                        .get(vcol)
                        .map(|c| c.text.clone())
                        .unwrap_or_default(),
                ),
                format!(
                    "{what} has {} points but at least {} are needed; add measurements or \
                     lower the minimum",
                    profile.position.len(),
                    opts.min_points
                ),
            ));
        }
        // Outliers in order of position.
        let mut order: Vec<usize> = (0..profile.position.len()).collect();
        order.sort_by(|&a, &b| {
            let pa = profile.position.get(a).copied().unwrap_or(0.0);
            let pb = profile.position.get(b).copied().unwrap_or(0.0);
            pa.total_cmp(&pb)
        });
        let ys: Vec<f64> = order
            .iter()
            .filter_map(|&i| profile.value.get(i).copied())
            .collect();
        let xs: Vec<f64> = order
            .iter()
            .filter_map(|&i| profile.position.get(i).copied())
            .collect();
        let vloc = |k: usize| {
            let i = order.get(k).copied().unwrap_or(0);
            header.cell(profile.line.get(i).copied().unwrap_or(0), vcol)
        };
        let show = |k: usize| {
            let y = ys.get(k).copied().unwrap_or(f64::NAN);
            format!("{} {}", vunit.from_si(y), vunit.label())
        };
        warnings.extend(checks::outliers(&xs, &ys, &vloc, &show, &what));
        out.profiles.push(profile);
    }
    Ok(Loaded {
        data: out,
        warnings,
        file: name.to_path_buf(),
    })
}

// ---------------------------------------------------------------------------------------------
// Shared helpers

fn open(path: &Path) -> Result<File> {
    if path.is_dir() {
        return Err(Error::input(
            InputKind::Unreadable,
            Location::file(path),
            "this is a folder, not a data file; name the CSV file inside it",
        ));
    }
    File::open(path).map_err(|e| {
        Error::input(
            InputKind::Unreadable,
            Location::file(path),
            format!("cannot open the file: {e}; check the file name and that it is readable"),
        )
    })
}

fn number(col: usize, unit: Unit) -> Request {
    Request::Number {
        col,
        unit,
        diff: false,
        check: CellCheck::None,
    }
}

fn time_request(col: usize, unit: Unit, opts: &ReadOptions) -> Request {
    Request::Number {
        col,
        unit,
        diff: false,
        check: if opts.time_origin.is_some() {
            CellCheck::None
        } else {
            CellCheck::NonNegative
        },
    }
}

/// The unit of an uncertainty column: its own (same kind as the value) or the value's.
fn sigma_unit(h: &Header, col: usize, spec: &ColumnSpec, value: &Unit) -> Result<Unit> {
    let has_own = spec.unit.is_some() || h.cols.get(col).is_some_and(|c| c.unit.is_some());
    if !has_own {
        return Ok(value.clone());
    }
    if value.quantity() == Quantity::Arbitrary {
        let header_unit = h.cols.get(col).and_then(|c| c.unit.as_deref());
        if spec.unit.is_none() && header_unit == Some(value.label()) {
            return Ok(value.clone());
        }
        return h.unit(col, spec, None);
    }
    h.unit(col, spec, Some(value.quantity()))
}

/// Strictly increasing times within `rows`; a row equal to the row before it in every read
/// column is a duplicate (any other non-increase is `TimeNotIncreasing`).
#[allow(clippy::too_many_arguments)]
fn check_increasing(
    time: &[f64],
    values: &[&[f64]],
    sigma: Option<&[f64]>,
    lines: &[u64],
    header: &Header,
    tcol: usize,
    tunit: &Unit,
    what: &str,
) -> Result<()> {
    let same = |a: usize, b: usize| {
        time.get(a) == time.get(b)
            && values.iter().all(|v| v.get(a) == v.get(b))
            && sigma.is_none_or(|s| s.get(a) == s.get(b))
    };
    for (prev, w) in time.windows(2).enumerate() {
        let [tp, tc] = *w else { continue };
        if tc > tp {
            continue;
        }
        let cur = prev + 1;
        let lc = lines.get(cur).copied().unwrap_or(0);
        // The same row twice in a row (pasted twice)?
        if same(prev, cur) {
            let ld = lines.get(prev).copied().unwrap_or(0);
            return Err(Error::input(
                InputKind::DuplicateRow,
                header.cell(lc, tcol),
                format!("{what}: line {lc} repeats line {ld}; delete one of them"),
            ));
        }
        let lp = lines.get(prev).copied().unwrap_or(0);
        return Err(Error::input(
            InputKind::TimeNotIncreasing,
            header.cell(lc, tcol),
            format!(
                "{what}: time {} {u} at line {lc} is not later than time {} {u} at line {lp}; \
                 times must increase within a series (sort the rows, or give each series its \
                 own run name)",
                tunit.from_si(tc),
                tunit.from_si(tp),
                u = tunit.label()
            ),
        ));
    }
    Ok(())
}
