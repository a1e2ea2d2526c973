//! Property-based fuzzing of the two readers of user files, in the normal test run: valid CSV
//! data files and valid experiment files are mutated the way files get damaged or mistyped
//! (lines deleted, duplicated or swapped; bytes flipped; delimiters, quotes, units, line
//! endings and odd bytes inserted; numbers changed to extreme values; the file cut short), and
//! each result must either load with sane values or fail with a located input error, never
//! panic and never give an internal error.
//!
//! Seeded (ChaCha, fixed seed) and bounded, so a run is repeatable and takes a few seconds.
//! The coverage-guided fuzz targets for long runs are in `fuzz/` (docs/fuzzing.md).

use std::path::Path;

use fickfit::data::{
    self, ColumnSpec, ProfileColumns, ProfileTime, ReadOptions, SensorColumns, SensorSpec,
    SeriesColumns,
};
use fickfit::{experiment, Error, InputKind};
use proptest::prelude::*;
use proptest::sample::Index;

/// One way of damaging a file.
#[derive(Debug, Clone)]
enum Mutation {
    DeleteLine(Index),
    DuplicateLine(Index),
    SwapLines(Index, Index),
    FlipByte(Index, u8),
    Insert(Index, &'static [u8]),
    /// Replace the k-th number in the text by an extreme or odd value.
    Number(Index, &'static str),
    Truncate(Index),
}

/// Inserted at random places: delimiters, quotes, line endings, units, comment marks,
/// byte-order marks, Latin-1 and NUL bytes, TOML punctuation and names.
const TOKENS: &[&[u8]] = &[
    b",",
    b";",
    b"\t",
    b"\"",
    b"\"\"",
    b"\r",
    b"\n",
    b"\r\n",
    b"#",
    b" mg",
    b" [s]",
    b"[um]",
    b"%",
    b"1,234.5",
    b"\xef\xbb\xbf",
    b"\xb5",
    b"\x00",
    b"=",
    b"[",
    b"]]",
    b"{",
    b"[[datasets]]",
    b"\"D\"",
    b" = \"1e400 um\"",
    b"nan",
];

/// Numbers put in place of a number of the file.
const EXTREMES: &[&str] = &[
    "1e400",
    "-1e400",
    "1e308",
    "-1e308",
    "1e-400",
    "0",
    "-0",
    "-1",
    "99999999999999999999",
    "NaN",
    "inf",
    "",
    "1.2.3",
    "0x1F",
];

fn mutation() -> impl Strategy<Value = Mutation> {
    prop_oneof![
        any::<Index>().prop_map(Mutation::DeleteLine),
        any::<Index>().prop_map(Mutation::DuplicateLine),
        (any::<Index>(), any::<Index>()).prop_map(|(a, b)| Mutation::SwapLines(a, b)),
        (any::<Index>(), 1u8..=255).prop_map(|(i, m)| Mutation::FlipByte(i, m)),
        (any::<Index>(), prop::sample::select(TOKENS)).prop_map(|(i, t)| Mutation::Insert(i, t)),
        (any::<Index>(), prop::sample::select(EXTREMES)).prop_map(|(i, x)| Mutation::Number(i, x)),
        any::<Index>().prop_map(Mutation::Truncate),
    ]
}

/// Split into lines keeping their endings.
fn lines(bytes: &[u8]) -> Vec<Vec<u8>> {
    bytes
        .split_inclusive(|&b| b == b'\n')
        .map(<[u8]>::to_vec)
        .collect()
}

fn apply(bytes: &mut Vec<u8>, m: &Mutation) {
    match m {
        Mutation::DeleteLine(i) | Mutation::DuplicateLine(i) => {
            let mut ls = lines(bytes);
            if ls.is_empty() {
                return;
            }
            let k = i.index(ls.len());
            if matches!(m, Mutation::DeleteLine(_)) {
                ls.remove(k);
            } else {
                let l = ls[k].clone();
                ls.insert(k, l);
            }
            *bytes = ls.concat();
        }
        Mutation::SwapLines(a, b) => {
            let mut ls = lines(bytes);
            if ls.is_empty() {
                return;
            }
            let (a, b) = (a.index(ls.len()), b.index(ls.len()));
            ls.swap(a, b);
            *bytes = ls.concat();
        }
        Mutation::FlipByte(i, mask) => {
            if !bytes.is_empty() {
                let k = i.index(bytes.len());
                bytes[k] ^= mask;
            }
        }
        Mutation::Insert(i, token) => {
            let k = i.index(bytes.len() + 1);
            bytes.splice(k..k, token.iter().copied());
        }
        Mutation::Number(i, x) => {
            // Runs of digits (with a sign, dot or exponent) are the numbers.
            let mut spans = Vec::new();
            let mut start = None;
            for (p, &b) in bytes.iter().enumerate() {
                let part = b.is_ascii_digit() || (start.is_some() && b".eE-+".contains(&b));
                match (part, start) {
                    (true, None) => start = Some(p),
                    (false, Some(s)) => {
                        spans.push(s..p);
                        start = None;
                    }
                    _ => {}
                }
            }
            if let Some(s) = start {
                spans.push(s..bytes.len());
            }
            if !spans.is_empty() {
                let r = spans[i.index(spans.len())].clone();
                bytes.splice(r, x.bytes());
            }
        }
        Mutation::Truncate(i) => {
            let k = i.index(bytes.len() + 1);
            bytes.truncate(k);
        }
    }
}

/// Lines as an editor counts them: LF, CRLF and a lone CR each end one.
fn line_count(bytes: &[u8]) -> u64 {
    let mut n = 1;
    let mut prev_cr = false;
    for &b in bytes {
        if b == b'\r' || (b == b'\n' && !prev_cr) {
            n += 1;
        }
        prev_cr = b == b'\r';
    }
    n
}

/// The error must be a located input error: a file always, and a line, column or key except
/// for a file without data.
fn assert_located(e: &Error, what: &str) -> Result<(), TestCaseError> {
    match e {
        Error::Input { kind, location, .. } => {
            prop_assert!(location.file.is_some(), "{what}: no file: {e}");
            prop_assert!(
                location.line.is_some()
                    || location.column.is_some()
                    || location.key.is_some()
                    || *kind == InputKind::Empty,
                "{what}: only a file: {e}"
            );
            prop_assert!(e.to_string().len() < 2_000, "{what}: message too long");
            Ok(())
        }
        other => Err(TestCaseError::fail(format!(
            "{what}: not a located input error: {other}"
        ))),
    }
}

// ------------------------------------------------------------------------------------- CSV

/// Valid files of the three shapes, in the three delimiters (invented values).
const SERIES: &[u8] = b"# balance log, run 4\ntime [min],mass [mg],u [mg],run\n0,12.41,0.003,a\n2,12.49,0.003,a\n5,12.54,0.003,a\n0,12.76,0.003,b\n2,12.70,0.003,b\n";
const SENSORS: &[u8] =
    b"time [s];T1 [degC];T2 [degC]\r\n0;20,0;20,1\r\n10;21,5;20,2\r\n20;23,0;20,9\r\n";
const PROFILES: &[u8] = b"t [h]\tx [um]\tc\tu\n1\t0\t1000\t5\n1\t5\t900\t5\n1\t10\t700\t5\n2\t0\t1000\t5\n2\t5\t950\t5\n";

/// Read `bytes` in the three shapes; true when any shape loaded.
fn check_csv(bytes: &[u8]) -> Result<bool, TestCaseError> {
    let n_lines = line_count(bytes);
    let series = SeriesColumns {
        sigma: Some(ColumnSpec::new("u")),
        run: Some("run".into()),
        ..SeriesColumns::new("time", "mass")
    };
    let mut loaded = false;
    match data::read_time_series_from(bytes, "f.csv", &series, &ReadOptions::default()) {
        Ok(l) => {
            loaded = true;
            for s in &l.data {
                prop_assert!(s.line.iter().all(|&k| (1..=n_lines).contains(&k)));
                prop_assert!(s.time.iter().chain(&s.value).all(|x| x.is_finite()));
                prop_assert!(s.time.windows(2).all(|w| w[0] < w[1]));
            }
        }
        Err(e) => assert_located(&e, "series")?,
    }
    let sensors = SensorColumns {
        time: ColumnSpec::new("time"),
        sensors: vec![
            SensorSpec {
                column: ColumnSpec::new("T1"),
                position: Some(0.01),
            },
            SensorSpec {
                column: ColumnSpec::new("T2"),
                position: Some(0.02),
            },
        ],
    };
    let opts = ReadOptions {
        decimal_comma: true,
        delimiter: Some(b';'),
        ..Default::default()
    };
    match data::read_sensor_table_from(bytes, "f.csv", &sensors, &opts) {
        Ok(l) => {
            loaded = true;
            prop_assert!(l.data.line.iter().all(|&k| (1..=n_lines).contains(&k)));
            for s in &l.data.sensors {
                prop_assert!(s.value.iter().all(|x| x.is_finite()));
            }
        }
        Err(e) => assert_located(&e, "sensors")?,
    }
    let profiles = ProfileColumns {
        position: ColumnSpec::new("x"),
        value: ColumnSpec::new("c"),
        sigma: Some(ColumnSpec::new("u")),
        time: ProfileTime::Column(ColumnSpec::new("t")),
    };
    let opts = ReadOptions {
        sample_extent: Some((0.0, 1e-4)),
        ..Default::default()
    };
    match data::read_profiles_from(bytes, "f.csv", &profiles, &opts) {
        Ok(l) => {
            loaded = true;
            for p in &l.data.profiles {
                prop_assert!(p.line.iter().all(|&k| (1..=n_lines).contains(&k)));
                prop_assert!(p.position.iter().all(|&x| (0.0..=1e-4).contains(&x)));
            }
        }
        Err(e) => assert_located(&e, "profiles")?,
    }
    Ok(loaded)
}

/// Run `cases` seeded cases of a property, counting how many inputs loaded; the run fails on
/// the first case that breaks the property (shrunk to a small one, as proptest does).
///
/// For longer runs without the coverage-guided fuzzer (docs/fuzzing.md),
/// `FICKFIT_FUZZ_CASES` multiplies the number of cases and `FICKFIT_FUZZ_SEED` changes the
/// seed, for example `FICKFIT_FUZZ_CASES=100 FICKFIT_FUZZ_SEED=7 cargo test --release --test
/// fuzz_parsers`.
fn run_counted<S: Strategy>(
    cases: u32,
    seed: u64,
    strategy: S,
    property: impl Fn(S::Value) -> Result<bool, TestCaseError>,
) -> (u32, u32) {
    let env = |name: &str| {
        std::env::var(name)
            .ok()
            .and_then(|v| v.trim().parse::<u32>().ok())
    };
    let cases = cases.saturating_mul(env("FICKFIT_FUZZ_CASES").unwrap_or(1).max(1));
    let seed = seed ^ u64::from(env("FICKFIT_FUZZ_SEED").unwrap_or(0));
    let config = ProptestConfig {
        cases,
        failure_persistence: None,
        rng_algorithm: proptest::test_runner::RngAlgorithm::ChaCha,
        rng_seed: proptest::test_runner::RngSeed::Fixed(seed),
        ..ProptestConfig::default()
    };
    let loaded = std::cell::Cell::new(0u32);
    let total = std::cell::Cell::new(0u32);
    let mut runner = proptest::test_runner::TestRunner::new(config);
    let result = runner.run(&strategy, |v| {
        let ok = property(v)?;
        total.set(total.get() + 1);
        loaded.set(loaded.get() + u32::from(ok));
        Ok(())
    });
    if let Err(e) = result {
        panic!("{e}");
    }
    (loaded.get(), total.get())
}

/// Damaged data files load sanely or fail with a located error, in every shape. Both
/// outcomes must occur often, or the mutations would not be testing what they claim.
#[test]
fn damaged_csv_files_load_or_fail_located() {
    let strategy = (
        prop::sample::select(vec![SERIES, SENSORS, PROFILES]),
        prop::collection::vec(mutation(), 1..6),
    );
    let (loaded, total) = run_counted(4000, 0x0BAD_F11E, strategy, |(seed, mutations)| {
        let mut bytes = seed.to_vec();
        for m in &mutations {
            apply(&mut bytes, m);
        }
        check_csv(&bytes)
    });
    eprintln!("damaged CSV files: {loaded} of {total} loaded in at least one shape");
    assert!(
        loaded > total / 50 && loaded < total - total / 20,
        "{loaded} of {total}"
    );
}

// -------------------------------------------------------------------------- experiment files

fn experiments() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/experiments")
}

fn fixture(name: &str) -> Vec<u8> {
    std::fs::read(experiments().join(name)).unwrap()
}

/// Damaged experiment files (which also name real data files) load or fail with an error
/// located in the experiment file (line, key) or in the data file it names.
#[test]
fn damaged_experiment_files_load_or_fail_located() {
    let strategy = (
        prop::sample::select(vec![
            "film_uptake.toml",
            "heated_rod.toml",
            "depth_profiles.toml",
        ]),
        prop::collection::vec(mutation(), 1..6),
    );
    let (loaded, total) = run_counted(1500, 0x0070_F11E, strategy, |(seed, mutations)| {
        let mut bytes = fixture(seed);
        for m in &mutations {
            apply(&mut bytes, m);
        }
        // Bytes that are not UTF-8 are the file reader's (load) business; the parser takes
        // text.
        let text = String::from_utf8_lossy(&bytes);
        match experiment::from_str(&text, Path::new("x.toml"), &experiments()) {
            Ok(e) => {
                prop_assert!(!e.datasets.is_empty());
                for d in e.datasets.iter() {
                    prop_assert!(d.observed.iter().chain(&d.sigma).all(|x| x.is_finite()));
                }
                // A start is a finite value, or NaN for one still to be derived from the data.
                prop_assert!(e.start_values().iter().all(|x| !x.is_infinite()));
                Ok(true)
            }
            Err(e) => assert_located(&e, seed).map(|_| false),
        }
    });
    eprintln!("damaged experiment files: {loaded} of {total} loaded");
    assert!(
        loaded > total / 50 && loaded < total - total / 20,
        "{loaded} of {total}"
    );
}

/// The mutations themselves do what they say (a mutation that did nothing would make the
/// properties above vacuous). A swap of a line with itself and a cut at the very end may
/// leave a file as it was, so they are not in the list.
#[test]
fn mutations_change_the_file() {
    let seed = SERIES.to_vec();
    let n = lines(&seed).len();
    let cases = [
        Mutation::DeleteLine(any_index(1)),
        Mutation::DuplicateLine(any_index(1)),
        Mutation::FlipByte(any_index(3), 0x20),
        Mutation::Insert(any_index(4), b"\""),
        Mutation::Number(any_index(0), "1e400"),
    ];
    for m in &cases {
        let mut b = seed.clone();
        apply(&mut b, m);
        assert_ne!(b, seed, "{m:?} changed nothing");
    }
    let mut b = seed.clone();
    apply(&mut b, &Mutation::DeleteLine(any_index(0)));
    assert_eq!(lines(&b).len(), n - 1);
    assert_eq!(line_count(b"a\rb\r\nc\nd"), 4);
}

/// A fixed `Index` drawn from a seeded generator (`Index` has no public constructor).
fn any_index(k: u64) -> Index {
    use proptest::strategy::ValueTree;
    use proptest::test_runner::{Config, RngAlgorithm, TestRng, TestRunner};
    let mut runner = TestRunner::new_with_rng(
        Config::default(),
        TestRng::from_seed(RngAlgorithm::ChaCha, &[k as u8; 32]),
    );
    any::<Index>()
        .new_tree(&mut runner)
        .map(|t| t.current())
        .unwrap_or_else(|e| panic!("{e}"))
}
