//! Loading CSV measurements: files that must work, every error case with its exact location,
//! unit conversion, run column, baseline rows, warnings, and a no-panic property test.
//!
//! Fixtures are in `tests/data/csv/` (see its README). Unit definitions: BIPM SI Brochure,
//! 9th ed. 2019 (1 min = 60 s, 1 h = 3600 s, 1 d = 86 400 s, T/K = t/°C + 273.15; from memory).

use std::path::PathBuf;

use approx::assert_relative_eq;
use fickfit::data::{
    self, ColumnSpec, Loaded, ProfileColumns, ProfileTime, ReadOptions, SensorColumns, SensorSpec,
    SeriesColumns, TimeSeries, WarningKind,
};
use fickfit::units::Unit;
use fickfit::{Error, InputKind};
use proptest::prelude::*;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/csv")
        .join(name)
}

fn mass_series() -> SeriesColumns {
    SeriesColumns::new("time", "mass")
}

fn series(name: &str, cols: &SeriesColumns, opts: &ReadOptions) -> Loaded<Vec<TimeSeries>> {
    match data::read_time_series(fixture(name), cols, opts) {
        Ok(l) => l,
        Err(e) => panic!("{name} should load: {e}"),
    }
}

fn one(name: &str) -> TimeSeries {
    let mut l = series(name, &mass_series(), &ReadOptions::default());
    assert_eq!(l.data.len(), 1, "{name}: one series expected");
    l.data.remove(0)
}

fn series_err(name: &str, cols: &SeriesColumns, opts: &ReadOptions) -> Error {
    match data::read_time_series(fixture(name), cols, opts) {
        Ok(_) => panic!("{name} should fail"),
        Err(e) => e,
    }
}

/// Assert kind, line and column of an input error; return its message.
fn check(e: &Error, kind: InputKind, line: Option<u64>, column: Option<&str>) -> String {
    assert_eq!(e.input_kind(), Some(kind), "wrong kind: {e}");
    let loc = e.location().cloned().unwrap_or_default();
    assert_eq!(loc.line, line, "wrong line: {e}");
    assert_eq!(loc.column.as_deref(), column, "wrong column: {e}");
    assert!(loc.file.is_some(), "no file in location: {e}");
    e.to_string()
}

// ------------------------------------------------------------------------------ files that work

#[test]
fn basic_file_with_comments_converts_to_si() {
    let s = one("ok_basic.csv");
    // 1 min = 60 s; 1 mg = 1e-6 kg.
    assert_eq!(
        s.time,
        vec![0.0, 60.0, 120.0, 240.0, 480.0, 960.0, 1920.0, 3840.0]
    );
    assert_relative_eq!(s.value[1], 0.35e-6, max_relative = 1e-12);
    assert_relative_eq!(s.value[7], 1.69e-6, max_relative = 1e-12);
    // Two comment lines and the header come first, so the data start on line 4.
    assert_eq!(s.line, (4..=11).collect::<Vec<u64>>());
    assert_eq!(s.value_unit.label(), "mg");
    assert_eq!(s.value_column, "mass [mg]");
    assert_relative_eq!(s.value_unit.from_si(s.value[1]), 0.35, max_relative = 1e-12);
    assert!(s.sigma.is_none());
    assert!(s.baseline.time.is_empty());
}

#[test]
fn bom_crlf_trailing_blank_lines_and_trailing_delimiter_all_work() {
    for name in [
        "ok_bom.csv",
        "ok_crlf.csv",
        "ok_trailing_blank.csv",
        "ok_trailing_delimiter.csv",
    ] {
        let s = one(name);
        assert_eq!(s.time, vec![0.0, 10.0, 20.0], "{name}");
        assert_relative_eq!(s.value[2], 0.7e-6, max_relative = 1e-12);
        let first_line = if name == "ok_crlf.csv" { 3 } else { 2 };
        assert_eq!(s.line[0], first_line, "{name}");
    }
}

#[test]
fn semicolon_file_with_decimal_comma() {
    let cols = SeriesColumns {
        time: ColumnSpec::new("zeit"),
        value: ColumnSpec::new("T"),
        sigma: Some(ColumnSpec::new("sigma T")),
        run: None,
    };
    let opts = ReadOptions {
        decimal_comma: true,
        ..Default::default()
    };
    let l = series("ok_semicolon_decimal_comma.csv", &cols, &opts);
    let s = &l.data[0];
    // 0,5 h = 1800 s; 26,5 degC = 299.65 K.
    assert_eq!(s.time, vec![0.0, 1800.0, 3600.0]);
    assert_relative_eq!(s.value[0], 298.15, epsilon = 1e-9);
    assert_relative_eq!(s.value[1], 299.65, epsilon = 1e-9);
    assert_relative_eq!(s.value[2], 300.4, epsilon = 1e-9);
    // An uncertainty of 0,5 degC is a difference: 0.5 K, not 273.65 K.
    assert_eq!(s.sigma, Some(vec![0.5, 0.5, 0.5]));
}

#[test]
fn decimal_comma_without_the_option_is_located_and_explained() {
    let e = series_err(
        "err_decimal_comma_not_set.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::NotANumber, Some(2), Some("mass [mg]"));
    assert!(
        msg.contains("'0,0'") && msg.contains("decimal comma"),
        "{msg}"
    );
}

#[test]
fn decimal_comma_in_a_comma_file_is_a_setting_error() {
    let opts = ReadOptions {
        decimal_comma: true,
        ..Default::default()
    };
    let e = series_err("ok_basic.csv", &mass_series(), &opts);
    assert!(matches!(e, Error::Setting { .. }), "{e}");
}

#[test]
fn tab_separated_file_with_day_and_micrometre_units() {
    let cols = ProfileColumns {
        position: ColumnSpec::new("x"),
        value: ColumnSpec::new("c"),
        sigma: None,
        time: ProfileTime::Column(ColumnSpec::new("time")),
    };
    let l = data::read_profiles(fixture("ok_tab.tsv"), &cols, &ReadOptions::default())
        .unwrap_or_else(|e| panic!("{e}"));
    let p = &l.data.profiles;
    assert_eq!(p.len(), 3);
    // 1 d = 86 400 s; 2.5 um = 2.5e-6 m; the value column has no unit: plain numbers.
    assert_eq!(p[1].time, 86400.0);
    assert_relative_eq!(p[1].position[0], 2.5e-6, max_relative = 1e-12);
    assert_eq!(p[2].value, vec![0.3]);
    assert_eq!(p[2].line, vec![4]);
}

#[test]
fn unit_override_replaces_the_header_unit() {
    // The header says nothing useful about 'counts'; the caller declares it arbitrary, and
    // declares the time as minutes instead of seconds.
    let cols = SeriesColumns {
        time: ColumnSpec::new("time")
            .with_unit(Unit::parse("min").unwrap_or_else(|e| panic!("{e}"))),
        value: ColumnSpec::new("signal").with_unit(Unit::arbitrary("counts")),
        sigma: None,
        run: None,
    };
    let l = series("ok_baseline.csv", &cols, &ReadOptions::default());
    let s = &l.data[0];
    assert_eq!(s.time[1], 3600.0);
    assert_eq!(s.value[3], 15.0);
    assert_eq!(s.value_unit.label(), "counts");
    // Without the override the unknown unit is refused, at the header cell.
    let e = series_err(
        "ok_baseline.csv",
        &SeriesColumns::new("time", "signal"),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::UnknownUnit, Some(1), Some("signal [counts]"));
    assert!(msg.contains("'counts'"), "{msg}");
}

#[test]
fn run_column_splits_the_file_into_series() {
    let cols = SeriesColumns {
        run: Some("RUN".into()), // header names match ignoring case
        ..mass_series()
    };
    let l = series("ok_runs.csv", &cols, &ReadOptions::default());
    assert_eq!(l.data.len(), 2);
    let (a, b) = (&l.data[0], &l.data[1]);
    assert_eq!(a.run.as_deref(), Some("A"));
    assert_eq!(b.run.as_deref(), Some("B"));
    assert_eq!(a.time, vec![0.0, 10.0, 20.0]);
    assert_eq!(b.time, vec![0.0, 15.0, 30.0, 45.0]);
    assert_eq!(b.line, vec![5, 6, 7, 8]);
    assert_relative_eq!(b.value[3], 10e-9, max_relative = 1e-12); // 10 ug
                                                                  // Without the run column the restart of time at line 5 is an error naming both lines.
    let e = series_err("ok_runs.csv", &mass_series(), &ReadOptions::default());
    let msg = check(&e, InputKind::TimeNotIncreasing, Some(5), Some("time [s]"));
    assert!(msg.contains("line 5") && msg.contains("line 4"), "{msg}");
}

#[test]
fn rows_before_the_time_origin_are_kept_as_baseline() {
    let cols = SeriesColumns {
        value: ColumnSpec::new("signal").with_unit(Unit::arbitrary("counts")),
        ..mass_series()
    };
    let opts = ReadOptions {
        time_origin: Some(120.0),
        ..Default::default()
    };
    let l = series("ok_baseline.csv", &cols, &opts);
    let s = &l.data[0];
    // The step is at 120 s: rows at 0 and 60 s are baseline, the rest shifted by -120 s.
    assert_eq!(s.baseline.time, vec![-120.0, -60.0]);
    assert_eq!(s.baseline.value, vec![10.0, 10.1]);
    assert_eq!(s.baseline.line, vec![2, 3]);
    assert_eq!(s.time, vec![0.0, 60.0, 120.0, 180.0]);
    assert_eq!(s.line, vec![4, 5, 6, 7]);
    // Baseline rows do not count towards the minimum number of points.
    let opts = ReadOptions {
        min_points: 5,
        ..opts
    };
    let e = series_err("ok_baseline.csv", &cols, &opts);
    check_no_line(&e, InputKind::TooFewPoints, Some("signal [counts]"));
}

#[test]
fn time_origin_allows_negative_times() {
    let opts = ReadOptions {
        time_origin: Some(-10.0),
        ..Default::default()
    };
    let l = series("err_negative_time.csv", &mass_series(), &opts);
    assert_eq!(l.data[0].time, vec![5.0, 20.0]);
    assert!(l.data[0].baseline.time.is_empty());
}

#[test]
fn sensor_table_with_positions_and_baseline() {
    let pos = |name: &str, x: f64| SensorSpec {
        column: ColumnSpec::new(name),
        position: Some(x),
    };
    let cols = SensorColumns {
        time: ColumnSpec::new("time"),
        sensors: vec![pos("T1", 0.01), pos("t2", 0.02), pos("T3", 0.03)],
    };
    let opts = ReadOptions {
        time_origin: Some(30.0),
        sample_extent: Some((0.0, 0.05)),
        ..Default::default()
    };
    let l = data::read_sensor_table(fixture("ok_sensors.csv"), &cols, &opts)
        .unwrap_or_else(|e| panic!("{e}"));
    let t = &l.data;
    assert_eq!(t.time, vec![0.0, 30.0, 60.0, 90.0]);
    assert_eq!(t.line, vec![4, 5, 6, 7]);
    assert_eq!(t.baseline_time, vec![-30.0]);
    assert_eq!(t.baseline_line, vec![3]);
    assert_eq!(t.sensors.len(), 3);
    assert_eq!(t.sensors[1].column, "T2 [degC]");
    assert_eq!(t.sensors[1].position, 0.02);
    // 20 degC = 293.15 K, 35 degC = 308.15 K; T3 is already in kelvin.
    assert_relative_eq!(t.sensors[0].baseline_value[0], 293.15, epsilon = 1e-9);
    assert_relative_eq!(t.sensors[0].value[1], 308.15, epsilon = 1e-9);
    assert_relative_eq!(t.sensors[2].value[3], 296.15, epsilon = 1e-12);

    // A sensor position outside the sample.
    let mut bad = cols.clone();
    bad.sensors[2].position = Some(0.07);
    let e = data::read_sensor_table(fixture("ok_sensors.csv"), &bad, &opts).unwrap_err();
    check(&e, InputKind::PositionOutside, Some(2), Some("T3 [K]"));
}

#[test]
fn profiles_grouped_by_time() {
    let cols = ProfileColumns {
        position: ColumnSpec::new("x"),
        value: ColumnSpec::new("c"),
        sigma: None,
        time: ProfileTime::Column(ColumnSpec::new("time")),
    };
    let opts = ReadOptions {
        sample_extent: Some((0.0, 500e-6)),
        min_points: 4,
        ..Default::default()
    };
    let l = data::read_profiles(fixture("ok_profiles.csv"), &cols, &opts)
        .unwrap_or_else(|e| panic!("{e}"));
    let p = &l.data.profiles;
    assert_eq!(p.len(), 2);
    assert_eq!(p[0].time, 3600.0);
    assert_eq!(p[1].time, 14400.0);
    assert_eq!(p[1].position.len(), 5);
    assert_relative_eq!(p[1].position[4], 200e-6, max_relative = 1e-12);
    assert_eq!(p[1].line, vec![6, 7, 8, 9, 10]);
    assert!(l.data.baseline.is_empty());

    // One time for the whole file, given by the caller.
    let cols = ProfileColumns {
        time: ProfileTime::Fixed(7200.0),
        ..cols
    };
    let l = data::read_profiles(
        fixture("err_position_outside.csv"),
        &cols,
        &ReadOptions::default(),
    )
    .unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(l.data.profiles.len(), 1);
    assert_eq!(l.data.profiles[0].time, 7200.0);
    assert_eq!(l.data.profiles[0].position.len(), 3);
}

#[test]
fn warnings_for_an_outlier_and_for_irregular_sampling() {
    let l = series("ok_outlier.csv", &mass_series(), &ReadOptions::default());
    let out: Vec<_> = l
        .warnings
        .iter()
        .filter(|w| w.kind == WarningKind::Outlier)
        .collect();
    assert_eq!(out.len(), 1, "{:?}", l.warnings);
    // The spike is point 25, i.e. line 27 (header on line 1, first point on line 2).
    assert_eq!(out[0].location.line, Some(27));
    assert_eq!(out[0].location.column.as_deref(), Some("mass [mg]"));
    assert!(l
        .warnings
        .iter()
        .all(|w| w.kind != WarningKind::IrregularSampling));

    let l = series("ok_irregular.csv", &mass_series(), &ReadOptions::default());
    assert!(
        l.warnings
            .iter()
            .any(|w| w.kind == WarningKind::IrregularSampling),
        "{:?}",
        l.warnings
    );
    // A clean file gives no warning at all.
    assert!(
        series("ok_basic.csv", &mass_series(), &ReadOptions::default())
            .warnings
            .is_empty()
    );
}

#[test]
fn heater_step_is_no_outlier_but_a_typing_error_beside_it_is() {
    // Invented log: a heater face switched from 20 to 90 degC at 300 s (a real step), a
    // thermocouple warming smoothly, 10 s readings printed to 0.01 degC with small
    // deterministic wiggles; one reading of the thermocouple, 35.1x at 490 s, typed with its
    // first two digits swapped (53.1x) on line 52 (header on line 2).
    let mut text = String::from("# invented bench log\ntime [s],heater [degC],T1 [degC]\n");
    for k in 0..120 {
        let t = 10.0 * k as f64;
        let heater = if t < 300.0 { 20.0 } else { 90.0 } + 0.05 * (1.7 * k as f64).sin();
        let mut t1 = 20.0
            + 40.0 * (1.0 - (-(t - 300.0).max(0.0) / 400.0).exp())
            + 0.04 * (2.3 * k as f64).cos();
        if k == 49 {
            assert!((35.0..36.0).contains(&t1), "{t1}");
            t1 += 18.0;
        }
        text.push_str(&format!("{t},{heater:.2},{t1:.2}\n"));
    }
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let path = dir.path().join("bench.csv");
    std::fs::write(&path, text).unwrap_or_else(|e| panic!("{e}"));
    let pos = |name: &str, x: f64| SensorSpec {
        column: ColumnSpec::new(name),
        position: Some(x),
    };
    let cols = SensorColumns {
        time: ColumnSpec::new("time"),
        sensors: vec![pos("heater", 0.0), pos("T1", 0.02)],
    };
    let l = data::read_sensor_table(&path, &cols, &ReadOptions::default())
        .unwrap_or_else(|e| panic!("{e}"));
    let out: Vec<_> = l
        .warnings
        .iter()
        .filter(|w| w.kind == WarningKind::Outlier)
        .collect();
    assert_eq!(out.len(), 1, "{:?}", l.warnings);
    assert_eq!(out[0].location.line, Some(52));
    assert_eq!(out[0].location.column.as_deref(), Some("T1 [degC]"));
    assert!(out[0].message.contains("value 53.1"), "{}", out[0].message);
}

// ------------------------------------------------------------------------- errors, located

fn check_no_line(e: &Error, kind: InputKind, column: Option<&str>) {
    check(e, kind, None, column);
}

#[test]
fn missing_file_is_unreadable() {
    let e = series_err("no_such_file.csv", &mass_series(), &ReadOptions::default());
    check_no_line(&e, InputKind::Unreadable, None);
    assert!(e.to_string().contains("no_such_file.csv"));
}

#[test]
fn empty_file_and_header_only_file() {
    let e = series_err("err_empty.csv", &mass_series(), &ReadOptions::default());
    check_no_line(&e, InputKind::Empty, None);
    let e = series_err(
        "err_header_only.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    check(&e, InputKind::Empty, Some(2), None);
}

#[test]
fn first_row_of_numbers_is_no_header() {
    let e = series_err("err_no_header.csv", &mass_series(), &ReadOptions::default());
    let msg = check(&e, InputKind::NoHeader, Some(2), None);
    assert!(msg.contains("'0'"), "{msg}");
}

#[test]
fn unknown_column_lists_the_columns_present() {
    let e = series_err(
        "err_unknown_column.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::UnknownColumn, Some(1), None);
    assert!(
        msg.contains("'mass'") && msg.contains("'time [s]', 'weight [mg]'"),
        "{msg}"
    );
}

#[test]
fn unknown_time_unit_lists_time_units() {
    let e = series_err(
        "err_unknown_unit.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(
        &e,
        InputKind::UnknownUnit,
        Some(1),
        Some("time [fortnight]"),
    );
    assert!(
        msg.contains("'fortnight'") && msg.contains("s, min, h, d"),
        "{msg}"
    );
}

#[test]
fn non_numeric_cell_is_quoted() {
    let e = series_err(
        "err_not_a_number.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::NotANumber, Some(4), Some("mass [mg]"));
    assert!(msg.contains("'abc'"), "{msg}");
}

#[test]
fn blank_value_cell_is_an_error_not_a_skip() {
    let e = series_err(
        "err_blank_value.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::NotANumber, Some(3), Some("mass [mg]"));
    assert!(
        msg.contains("blank") && msg.contains("delete the row"),
        "{msg}"
    );
}

#[test]
fn nan_and_infinity_are_not_finite() {
    let e = series_err(
        "err_not_finite.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::NotFinite, Some(4), Some("mass [mg]"));
    assert!(msg.contains("'NaN'"), "{msg}");
    let e = series_err("err_infinite.csv", &mass_series(), &ReadOptions::default());
    check(&e, InputKind::NotFinite, Some(3), Some("time [s]"));
}

#[test]
fn negative_time_without_origin() {
    let e = series_err(
        "err_negative_time.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::NegativeTime, Some(2), Some("time [s]"));
    assert!(msg.contains("'-5'"), "{msg}");
}

#[test]
fn time_going_back_names_both_lines() {
    let e = series_err(
        "err_time_not_increasing.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::TimeNotIncreasing, Some(5), Some("time [s]"));
    assert!(msg.contains("line 5") && msg.contains("line 4"), "{msg}");
}

#[test]
fn repeated_row_names_both_lines() {
    let e = series_err(
        "err_duplicate_row.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::DuplicateRow, Some(5), Some("time [s]"));
    assert!(msg.contains("line 5 repeats line 4"), "{msg}");
}

#[test]
fn position_outside_the_sample() {
    let cols = ProfileColumns {
        position: ColumnSpec::new("x"),
        value: ColumnSpec::new("c"),
        sigma: None,
        time: ProfileTime::Fixed(3600.0),
    };
    let opts = ReadOptions {
        sample_extent: Some((0.0, 1e-3)), // a 1 mm sample
        ..Default::default()
    };
    let e = data::read_profiles(fixture("err_position_outside.csv"), &cols, &opts).unwrap_err();
    let msg = check(&e, InputKind::PositionOutside, Some(4), Some("x [um]"));
    assert!(msg.contains("'1200'"), "{msg}");
}

#[test]
fn sensor_without_position() {
    let cols = SensorColumns {
        time: ColumnSpec::new("time"),
        sensors: vec![
            SensorSpec {
                column: ColumnSpec::new("T1"),
                position: Some(0.0),
            },
            SensorSpec {
                column: ColumnSpec::new("T2"),
                position: None,
            },
        ],
    };
    let path = fixture("err_sensor_without_position.csv");
    let e = data::read_sensor_table(&path, &cols, &ReadOptions::default()).unwrap_err();
    check(
        &e,
        InputKind::SensorWithoutPosition,
        Some(1),
        Some("T2 [degC]"),
    );
    // With no sensor list every other column is a sensor; none has a position.
    let all = SensorColumns {
        sensors: vec![],
        ..cols
    };
    let e = data::read_sensor_table(&path, &all, &ReadOptions::default()).unwrap_err();
    check(
        &e,
        InputKind::SensorWithoutPosition,
        Some(1),
        Some("T1 [degC]"),
    );
}

#[test]
fn zero_uncertainty_is_refused() {
    let cols = SeriesColumns {
        sigma: Some(ColumnSpec::new("sigma")),
        ..mass_series()
    };
    let e = series_err("err_bad_uncertainty.csv", &cols, &ReadOptions::default());
    check(&e, InputKind::BadUncertainty, Some(4), Some("sigma [mg]"));
}

#[test]
fn ragged_rows_short_and_long() {
    let e = series_err(
        "err_ragged_short.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::RaggedRow, Some(3), Some("sigma [mg]"));
    assert!(
        msg.contains("2 cells") && msg.contains("3 columns"),
        "{msg}"
    );
    let e = series_err(
        "err_ragged_long.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::RaggedRow, Some(3), Some("3"));
    assert!(msg.contains("'7'"), "{msg}");
}

#[test]
fn invalid_utf8_is_an_encoding_error() {
    let e = series_err("err_encoding.csv", &mass_series(), &ReadOptions::default());
    check(&e, InputKind::Encoding, Some(3), Some("mass [mg]"));
}

#[test]
fn too_few_points() {
    let opts = ReadOptions {
        min_points: 5,
        ..Default::default()
    };
    let e = series_err("err_too_few_points.csv", &mass_series(), &opts);
    let msg = e.to_string();
    check_no_line(&e, InputKind::TooFewPoints, Some("mass [mg]"));
    assert!(
        msg.contains("3 points") && msg.contains("at least 5"),
        "{msg}"
    );
    // The same file passes with a minimum it meets.
    let opts = ReadOptions {
        min_points: 3,
        ..Default::default()
    };
    assert_eq!(
        series("err_too_few_points.csv", &mass_series(), &opts).data[0]
            .time
            .len(),
        3
    );
}

// ------------------------------------------------------------------------ no panic on garbage

proptest! {
    #![proptest_config(ProptestConfig {
        cases: 256,
        failure_persistence: None,
        rng_algorithm: proptest::test_runner::RngAlgorithm::ChaCha,
        rng_seed: proptest::test_runner::RngSeed::Fixed(0x00F1_C4F1),
        ..ProptestConfig::default()
    })]

    /// Arbitrary bytes never panic the reader: they load or give an error.
    #[test]
    fn arbitrary_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..512)) {
        let cols = SeriesColumns { sigma: Some(ColumnSpec::new("s")), run: Some("r".into()), ..SeriesColumns::new("t", "m") };
        let _ = data::read_time_series_from(&bytes[..], "fuzz.csv", &cols, &ReadOptions::default());
        let _ = data::read_time_series_from(&bytes[..], "fuzz.csv", &cols, &ReadOptions { time_origin: Some(1.0), decimal_comma: true, delimiter: Some(b';'), ..Default::default() });
    }

    /// Text that looks like a CSV file (header t,m,s then rows of short tokens) never panics
    /// either, and when it loads every point's line is a real line of the input.
    #[test]
    fn csv_like_text_never_panics(
        rows in proptest::collection::vec(
            proptest::collection::vec(
                prop_oneof![
                    Just(String::new()), Just("nan".to_string()), Just("-1".to_string()),
                    Just("#".to_string()), Just("\"".to_string()), (0u32..100).prop_map(|v| v.to_string()),
                    "[a-z0-9.,;]{0,3}".prop_map(|s| s),
                ],
                0..5,
            ),
            0..20,
        )
    ) {
        let mut text = String::from("t [s],m [mg],s [mg]\n");
        for r in &rows {
            text.push_str(&r.join(","));
            text.push('\n');
        }
        let n_lines = text.lines().count() as u64;
        let cols = SeriesColumns { sigma: Some(ColumnSpec::new("s")), ..SeriesColumns::new("t", "m") };
        let sensors = SensorColumns {
            time: ColumnSpec::new("t"),
            sensors: vec![SensorSpec { column: ColumnSpec::new("m"), position: Some(0.0) }],
        };
        let profiles = ProfileColumns {
            position: ColumnSpec::new("m").with_unit(Unit::parse("mm").unwrap_or_else(|e| panic!("{e}"))),
            value: ColumnSpec::new("s"),
            sigma: None,
            time: ProfileTime::Column(ColumnSpec::new("t")),
        };
        if let Ok(l) = data::read_time_series_from(text.as_bytes(), "f.csv", &cols, &ReadOptions::default()) {
            for s in &l.data {
                prop_assert!(s.line.iter().all(|&k| k >= 2 && k <= n_lines));
            }
        }
        let _ = data::read_sensor_table_from(text.as_bytes(), "f.csv", &sensors, &ReadOptions::default());
        let _ = data::read_profiles_from(text.as_bytes(), "f.csv", &profiles, &ReadOptions::default());
    }
}

#[test]
fn line_numbers_count_comments_and_blank_lines_inside_the_data() {
    // CRLF file with a blank line, a comment and a blank-looking line between the rows: the
    // bad cell is on line 8 of the file.
    let e = series_err(
        "err_not_a_number_crlf_comments.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::NotANumber, Some(8), Some("mass [mg]"));
    assert!(msg.contains("'oops'"), "{msg}");
}

// ------------------------------------------------------------------- more cases, in memory

fn from_bytes(bytes: &[u8]) -> Result<Loaded<Vec<TimeSeries>>, Error> {
    data::read_time_series_from(bytes, "mem.csv", &mass_series(), &ReadOptions::default())
}

#[test]
fn time_column_without_unit_is_refused() {
    let e = from_bytes(b"time,mass [mg]\n0,1\n").unwrap_err();
    let msg = check(&e, InputKind::UnknownUnit, Some(1), Some("time"));
    assert!(msg.contains("s, min, h, d"), "{msg}");
}

#[test]
fn utf16_file_is_an_encoding_error() {
    let e = from_bytes(b"\xff\xfet\x00i\x00").unwrap_err();
    check(&e, InputKind::Encoding, Some(1), None);
}

#[test]
fn two_columns_with_the_same_name_are_ambiguous() {
    let e = from_bytes(b"time [s],mass [mg],Mass [g]\n0,1,2\n").unwrap_err();
    let msg = check(&e, InputKind::UnknownColumn, Some(1), Some("mass [mg]"));
    assert!(msg.contains("'Mass [g]'"), "{msg}");
}

#[test]
fn quoted_cells_with_delimiters_and_newlines_keep_line_numbers() {
    // The quoted label spans lines 2-3; the bad cell is on line 5.
    let text = b"time [s],note,mass [mg]\n0,\"a, b\nc\",1\n10,x,2\n20,y,zz\n";
    let cols = SeriesColumns::new("time", "mass");
    let e = data::read_time_series_from(&text[..], "q.csv", &cols, &ReadOptions::default())
        .unwrap_err();
    check(&e, InputKind::NotANumber, Some(5), Some("mass [mg]"));
}

#[test]
fn repeated_profile_row_is_a_duplicate() {
    let text = b"x [mm],c\n0,1\n0.5,0.4\n0.5,0.4\n";
    let cols = ProfileColumns {
        position: ColumnSpec::new("x"),
        value: ColumnSpec::new("c"),
        sigma: None,
        time: ProfileTime::Fixed(60.0),
    };
    let e =
        data::read_profiles_from(&text[..], "p.csv", &cols, &ReadOptions::default()).unwrap_err();
    let msg = check(&e, InputKind::DuplicateRow, Some(4), Some("x [mm]"));
    assert!(msg.contains("line 4 repeats line 3"), "{msg}");
}

#[test]
fn a_number_that_overflows_in_si_units_is_located() {
    // 1e307 d is finite as written but 8.64e311 s is not (IEEE 754 double range ≈ 1.8e308,
    // common practice): the cell is named, not loaded as infinity.
    let e = series_err(
        "err_overflow_after_unit.csv",
        &mass_series(),
        &ReadOptions::default(),
    );
    let msg = check(&e, InputKind::NotFinite, Some(3), Some("time [d]"));
    assert!(msg.contains("overflows"), "{msg}");
}
