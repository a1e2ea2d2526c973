//! Bad input: malformed data files and experiment files, each with the error kind and the
//! place (file, line, column or key) the user is sent to; and the inputs a user would expect
//! to work (byte-order mark, CRLF, old-Mac CR line endings, comments in another encoding),
//! which must load with the right values.
//!
//! The cases here are new; those already in `tests/data_loading.rs` and
//! `tests/experiment_file.rs` (a plain UTF-16 byte-order mark, a bad cell, a blank cell, NaN,
//! two columns named alike, a self-referencing parameter, an undefined parameter, a missing
//! data file, ...) are not repeated. Inputs are built in memory or in a temporary folder from
//! the experiment fixture `tests/data/experiments/film_uptake.toml`, so every case shows its
//! bytes next to its expectation. Values in the data are invented.

use std::path::{Path, PathBuf};
use std::process::Command;

use fickfit::data::{
    self, ColumnSpec, ProfileColumns, ProfileTime, ReadOptions, SensorColumns, SensorSpec,
    SeriesColumns, TimeSeries,
};
use fickfit::experiment::{self, Experiment};
use fickfit::{Error, InputKind};

// ------------------------------------------------------------------------------------ helpers

/// The columns every in-memory time series below uses.
fn cols() -> SeriesColumns {
    SeriesColumns::new("time", "mass")
}

fn series(bytes: &[u8], opts: &ReadOptions) -> Result<Vec<TimeSeries>, Error> {
    data::read_time_series_from(bytes, "bad.csv", &cols(), opts).map(|l| l.data)
}

/// A malformed CSV input and the error it must give.
struct CsvCase {
    name: &'static str,
    bytes: Vec<u8>,
    kind: InputKind,
    line: Option<u64>,
    column: Option<&'static str>,
}

fn case(
    name: &'static str,
    bytes: impl Into<Vec<u8>>,
    kind: InputKind,
    line: Option<u64>,
    column: Option<&'static str>,
) -> CsvCase {
    CsvCase {
        name,
        bytes: bytes.into(),
        kind,
        line,
        column,
    }
}

/// Assert kind, file, line and column of an input error; return the message.
fn located(
    name: &str,
    e: &Error,
    kind: InputKind,
    line: Option<u64>,
    column: Option<&str>,
) -> String {
    assert_eq!(e.input_kind(), Some(kind), "{name}: wrong kind: {e}");
    let loc = e.location().cloned().unwrap_or_default();
    assert!(loc.file.is_some(), "{name}: no file: {e}");
    assert_eq!(loc.line, line, "{name}: wrong line: {e}");
    assert_eq!(loc.column.as_deref(), column, "{name}: wrong column: {e}");
    e.to_string()
}

fn run_csv_cases(cases: &[CsvCase], opts: &ReadOptions) -> usize {
    for c in cases {
        match series(&c.bytes, opts) {
            Ok(s) => panic!("{}: should fail, loaded {s:?}", c.name),
            Err(e) => {
                located(c.name, &e, c.kind, c.line, c.column);
            }
        }
    }
    cases.len()
}

/// UTF-16 encodings of `text`, little- and big-endian.
fn utf16(text: &str, big_endian: bool) -> Vec<u8> {
    text.encode_utf16()
        .flat_map(|u| {
            if big_endian {
                u.to_be_bytes()
            } else {
                u.to_le_bytes()
            }
        })
        .collect()
}

const GOOD: &str = "time [s],mass [mg]\n0,1\n10,2\n20,3\n";

// ---------------------------------------------------------------------------- CSV: must fail

#[test]
fn truncated_files_are_located() {
    use InputKind::*;
    let n = run_csv_cases(
        &[
            // Cut inside the last row, before its second cell.
            case(
                "cut mid-row",
                "time [s],mass [mg]\n0,1\n10,2\n20",
                RaggedRow,
                Some(4),
                Some("mass [mg]"),
            ),
            // Cut right after the delimiter.
            case(
                "cut after delimiter",
                "time [s],mass [mg]\n0,1\n10,2\n20,",
                NotANumber,
                Some(4),
                Some("mass [mg]"),
            ),
            // Cut inside the header.
            case("cut in header", "time [s],ma", UnknownColumn, Some(1), None),
            // Cut inside a quoted note: the csv reader alone would read the rest of the file
            // as that one cell and drop the rows after it (it did, before this test).
            case(
                "cut in quoted field",
                "time [s],mass [mg],note\n0,1,\"started late\n10,2,ok\n20,3,ok\n",
                Syntax,
                Some(2),
                Some("note"),
            ),
            // The header's own quote left open.
            case(
                "open quote in header",
                "time [s],\"mass [mg]\n0,1\n",
                Syntax,
                Some(1),
                Some("2"),
            ),
        ],
        &ReadOptions::default(),
    );
    assert_eq!(n, 5);
}

#[test]
fn wrong_encodings_are_located() {
    use InputKind::*;
    let mut utf16be_bom = vec![0xFE, 0xFF];
    utf16be_bom.extend(utf16(GOOD, true));
    let n = run_csv_cases(
        &[
            // "µg" saved in Latin-1 (0xB5) in the header.
            case(
                "Latin-1 header",
                &b"time [s],mass [\xb5g]\n0,1\n"[..],
                Encoding,
                Some(1),
                Some("2"),
            ),
            // "°C" saved in Latin-1 (0xB0) in a data cell.
            case(
                "Latin-1 cell",
                &b"time [s],mass [mg],note\n0,1,25 \xb0C\n"[..],
                Encoding,
                Some(2),
                Some("note"),
            ),
            case("UTF-16 BE with BOM", utf16be_bom, Encoding, Some(1), None),
            // Without a byte-order mark the file is ASCII with NUL bytes between: it used to
            // be read as a header of garbled names ("no column named 'time'").
            case(
                "UTF-16 LE without BOM",
                utf16(GOOD, false),
                Encoding,
                Some(1),
                None,
            ),
            case(
                "UTF-16 BE without BOM",
                utf16(GOOD, true),
                Encoding,
                Some(1),
                None,
            ),
            // A picture and a compressed file given as data.
            case(
                "PNG file",
                &b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR"[..],
                Encoding,
                Some(1),
                Some("1"),
            ),
            case(
                "gzip file",
                &b"\x1f\x8b\x08\x00\xa3\xc1\x9e\x65\x00\x03\xed\xc1"[..],
                Encoding,
                Some(1),
                None,
            ),
        ],
        &ReadOptions::default(),
    );
    assert_eq!(n, 7);
}

#[test]
fn mixed_delimiters_and_footers_are_located() {
    use InputKind::*;
    let n = run_csv_cases(
        &[
            // One row written with semicolons in a comma file.
            case(
                "semicolon row",
                "time [s],mass [mg]\n0,1\n10;2\n",
                RaggedRow,
                Some(3),
                Some("mass [mg]"),
            ),
            // A header mixing tab and comma: the tab wins, the rest is one odd column.
            case(
                "tab and comma header",
                "time [s]\tmass [mg],note\n0\t1,x\n",
                UnknownColumn,
                Some(1),
                None,
            ),
            // Excel's "sep=" line before the header is not a header.
            case(
                "sep= line",
                "sep=;\ntime [s];mass [mg]\n0;1\n",
                UnknownColumn,
                Some(1),
                None,
            ),
            // Instrument summary lines after the data.
            case(
                "footer total",
                "time [s],mass [mg]\n0,1\n10,2\nTotal,2\n",
                NotANumber,
                Some(4),
                Some("time [s]"),
            ),
            case(
                "footer one cell",
                "time [s],mass [mg]\n0,1\n10,2\nEnd of run\n",
                RaggedRow,
                Some(4),
                Some("mass [mg]"),
            ),
            case(
                "footer three cells",
                "time [s],mass [mg]\n0,1\n10,2\nInstrument TGA-7,serial 0042,passed\n",
                RaggedRow,
                Some(4),
                Some("3"),
            ),
            // A web page saved under a .csv name.
            case(
                "HTML page",
                "<!DOCTYPE html>\n<html><body>\n",
                UnknownColumn,
                Some(1),
                None,
            ),
        ],
        &ReadOptions::default(),
    );
    assert_eq!(n, 7);
}

#[test]
fn thousands_separators_are_located() {
    use InputKind::*;
    let n = run_csv_cases(
        &[
            case(
                "quoted 1,200",
                "time [s],mass [mg]\n0,1\n\"1,200\",2\n",
                NotANumber,
                Some(3),
                Some("time [s]"),
            ),
            // Unquoted, the separator splits the number into two cells.
            case(
                "unquoted 1,200",
                "time [s],mass [mg]\n0,1\n1,200,2\n",
                RaggedRow,
                Some(3),
                Some("3"),
            ),
            case(
                "space 1 200",
                "time [s],mass [mg]\n0,1\n1 200,2\n",
                NotANumber,
                Some(3),
                Some("time [s]"),
            ),
            case(
                "apostrophe 1'200",
                "time [s],mass [mg]\n0,1\n1'200,2\n",
                NotANumber,
                Some(3),
                Some("time [s]"),
            ),
            case(
                "thin space",
                "time [s],mass [mg]\n0,1\n1\u{2009}200,2\n",
                NotANumber,
                Some(3),
                Some("time [s]"),
            ),
        ],
        &ReadOptions::default(),
    );
    // A dot as thousands separator in a decimal-comma file: 1.200,5 is not 1200.5.
    let e = series(
        b"time [s];mass [mg]\n0;1\n1.200,5;2\n",
        &ReadOptions {
            decimal_comma: true,
            ..Default::default()
        },
    )
    .unwrap_err();
    located("dot thousands", &e, NotANumber, Some(3), Some("time [s]"));
    assert_eq!(n + 1, 6);
}

#[test]
fn units_in_the_wrong_place_are_located() {
    use InputKind::*;
    let n = run_csv_cases(
        &[
            case(
                "unit in value cell",
                "time [s],mass [mg]\n0,1\n10,12.5 mg\n",
                NotANumber,
                Some(3),
                Some("mass [mg]"),
            ),
            case(
                "unit in time cell",
                "time [s],mass [mg]\n0,1\n10 s,2\n",
                NotANumber,
                Some(3),
                Some("time [s]"),
            ),
            case(
                "percent sign",
                "time [s],mass [mg]\n0,1\n10,12%\n",
                NotANumber,
                Some(3),
                Some("mass [mg]"),
            ),
            // A unit row under a header that already has units.
            case(
                "unit row",
                "time [s],mass [mg]\ns,mg\n0,1\n",
                NotANumber,
                Some(2),
                Some("time [s]"),
            ),
            // Units in a row of their own instead of in the header: the time has no unit.
            case(
                "units below header",
                "time,mass\n[s],[mg]\n0,1\n",
                UnknownUnit,
                Some(1),
                Some("time"),
            ),
            // The unit written before the name.
            case(
                "unit before name",
                "[s] time,mass [mg]\n0,1\n",
                UnknownColumn,
                Some(1),
                None,
            ),
            case(
                "unknown unit",
                "time [fortnight],mass [mg]\n0,1\n",
                UnknownUnit,
                Some(1),
                Some("time [fortnight]"),
            ),
        ],
        &ReadOptions::default(),
    );
    assert_eq!(n, 7);
}

#[test]
fn huge_numbers_are_not_finite_and_located() {
    use InputKind::*;
    let n = run_csv_cases(
        &[
            // 1e400 exceeds the double range (about 1.8e308; IEEE 754, common practice).
            case(
                "1e400 value",
                "time [s],mass [mg]\n0,1\n10,1e400\n",
                NotFinite,
                Some(3),
                Some("mass [mg]"),
            ),
            case(
                "-1e400 value",
                "time [s],mass [mg]\n0,1\n10,-1e400\n",
                NotFinite,
                Some(3),
                Some("mass [mg]"),
            ),
            case(
                "1e400 time",
                "time [s],mass [mg]\n0,1\n1e400,2\n",
                NotFinite,
                Some(3),
                Some("time [s]"),
            ),
            // 400 digits: finite as text? No, it overflows too.
            case(
                "400 digits",
                format!("time [s],mass [mg]\n0,1\n10,{}\n", "9".repeat(400)),
                NotFinite,
                Some(3),
                Some("mass [mg]"),
            ),
        ],
        &ReadOptions::default(),
    );
    assert_eq!(n, 4);
}

#[test]
fn odd_bytes_and_long_cells_give_short_located_messages() {
    use InputKind::*;
    // A 10 000-character cell: the message quotes its start only (it used to quote it whole).
    let long = format!("time [s],mass [mg]\n0,{}\n", "x".repeat(10_000));
    let e = series(long.as_bytes(), &ReadOptions::default()).unwrap_err();
    let msg = located("long cell", &e, NotANumber, Some(2), Some("mass [mg]"));
    assert!(msg.len() < 300, "{} characters: {msg}", msg.len());
    // A NUL byte in a cell is shown escaped, not written raw to the terminal.
    let e = series(b"time [s],mass [mg]\n0,1\x00\n", &ReadOptions::default()).unwrap_err();
    let msg = located("NUL in cell", &e, NotANumber, Some(2), Some("mass [mg]"));
    assert!(msg.contains("1\\u{0}") && !msg.contains('\0'), "{msg}");
    // The same column name twice (here exactly the same header text).
    let e = series(
        b"time [s],time [s],mass [mg]\n0,0,1\n",
        &ReadOptions::default(),
    )
    .unwrap_err();
    located(
        "same header twice",
        &e,
        UnknownColumn,
        Some(1),
        Some("time [s]"),
    );
    // A file that is only a UTF-8 byte-order mark is empty.
    let e = series(b"\xef\xbb\xbf", &ReadOptions::default()).unwrap_err();
    located("only BOM", &e, Empty, None, None);
    // CR-only line endings: the bad cell is on line 4, not "line 1" (it was, before).
    let e = series(
        b"time [s],mass [mg]\r0,1\r10,2\r20,x\r",
        &ReadOptions::default(),
    )
    .unwrap_err();
    located(
        "CR-only bad cell",
        &e,
        NotANumber,
        Some(4),
        Some("mass [mg]"),
    );
    // Mixed CRLF and LF: lines still counted as an editor shows them.
    let e = series(
        b"time [s],mass [mg]\r\n0,1\n10,2\r\n\r\n20,x\n",
        &ReadOptions::default(),
    )
    .unwrap_err();
    located(
        "mixed line endings",
        &e,
        NotANumber,
        Some(5),
        Some("mass [mg]"),
    );
}

#[test]
fn sensor_and_profile_files_are_located_too() {
    use InputKind::*;
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
    let read = |b: &[u8]| {
        data::read_sensor_table_from(b, "rod.csv", &sensors, &ReadOptions::default()).unwrap_err()
    };
    let e = read(b"time [s],T1 [degC],T2 [degC]\n0,20,20\n10,21.5 degC,20\n");
    located(
        "unit in sensor cell",
        &e,
        NotANumber,
        Some(3),
        Some("T1 [degC]"),
    );
    let e = read(b"time [s],T1 [degC],T2 [degC]\n0,20,20\n10,21");
    located("sensor row cut", &e, RaggedRow, Some(3), Some("T2 [degC]"));
    let e = read(b"time [s];T1 [degC];T2 [degC]\n0;20;20\n10;21,5;20\n");
    located(
        "decimal comma not set",
        &e,
        NotANumber,
        Some(3),
        Some("T1 [degC]"),
    );

    let profile = |time| ProfileColumns {
        position: ColumnSpec::new("x"),
        value: ColumnSpec::new("c"),
        sigma: None,
        time,
    };
    let read = |b: &[u8], cols: &ProfileColumns| {
        data::read_profiles_from(b, "depth.csv", cols, &ReadOptions::default()).unwrap_err()
    };
    let e = read(b"x,c\n0,1000\n", &profile(ProfileTime::Fixed(60.0)));
    located("position without unit", &e, UnknownUnit, Some(1), Some("x"));
    let e = read(
        b"x [um],c\n0,1000\n1e400,900\n",
        &profile(ProfileTime::Fixed(60.0)),
    );
    located("huge position", &e, NotFinite, Some(3), Some("x [um]"));
    let e = read(
        b"t [h],x [um],c\n1,0,1000\n1 h,5,900\n",
        &profile(ProfileTime::Column(ColumnSpec::new("t"))),
    );
    located(
        "unit in profile time",
        &e,
        NotANumber,
        Some(3),
        Some("t [h]"),
    );
}

#[test]
fn a_folder_given_as_a_data_file_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let e = data::read_time_series(dir.path(), &cols(), &ReadOptions::default()).unwrap_err();
    assert_eq!(e.input_kind(), Some(InputKind::Unreadable), "{e}");
    assert_eq!(
        e.location().and_then(|l| l.file.clone()),
        Some(dir.path().to_path_buf())
    );
    assert!(e.to_string().contains("folder"), "{e}");
}

// ----------------------------------------------------------------------------- CSV: must work

fn loads(bytes: &[u8]) -> TimeSeries {
    match series(bytes, &ReadOptions::default()) {
        Ok(mut s) if s.len() == 1 => s.remove(0),
        Ok(s) => panic!("one series expected, got {}", s.len()),
        Err(e) => panic!("should load: {e}"),
    }
}

/// 1 mg = 1e-6 kg (BIPM SI Brochure, 9th ed., Table 8 — from memory).
fn mg(x: f64) -> f64 {
    x * 1e-6
}

#[test]
fn inputs_a_user_expects_to_work_load_with_the_right_values() {
    // Old-Mac CR-only line endings (these used to load with every line reported as line 1).
    let s = loads(b"time [s],mass [mg]\r0,1\r10,2\r20,3\r");
    assert_eq!(s.time, vec![0.0, 10.0, 20.0]);
    assert_eq!(s.value, vec![mg(1.0), mg(2.0), mg(3.0)]);
    assert_eq!(s.line, vec![2, 3, 4]);
    // CR-only with a comment first (this used to be read as one comment: "no data").
    let s = loads(b"# balance log\rtime [s],mass [mg]\r0,1\r10,2\r");
    assert_eq!(s.time, vec![0.0, 10.0]);
    assert_eq!(s.line, vec![3, 4]);
    // BOM, then a comment line, CRLF endings, blank lines at the end.
    let s = loads(b"\xef\xbb\xbf# run 7\r\ntime [s],mass [mg]\r\n0,1\r\n10,2\r\n\r\n\r\n");
    assert_eq!(s.value, vec![mg(1.0), mg(2.0)]);
    assert_eq!(s.line, vec![3, 4]);
    // A Latin-1 byte in a comment does not matter: comments are not read.
    let s = loads(b"# r\xe9sum\xe9 of run 3\ntime [s],mass [mg]\n0,1\n10,2\n");
    assert_eq!(s.value, vec![mg(1.0), mg(2.0)]);
    // An empty column between the two read ones (header cell blank too).
    let s = loads(b"time [s],,mass [mg]\n0,,1\n10,,2\n");
    assert_eq!(s.value, vec![mg(1.0), mg(2.0)]);
    // Quoted numbers, blanks and tabs around cells, a trailing delimiter on every row.
    let s = loads(b"\"time [s]\",\"mass [mg]\",\n\"0\", 1.5 ,\n10,\t2.5\t,\n");
    assert_eq!(s.time, vec![0.0, 10.0]);
    assert_eq!(s.value, vec![mg(1.5), mg(2.5)]);
    // A double quote inside an unquoted cell is a plain character (an inch mark), and the
    // comment after it is still a comment.
    let s = loads(b"time [s],mass [mg],note\n0,1,12\" pipe\n# moved\n10,2,ok\n");
    assert_eq!(s.line, vec![2, 4]);
    // A CRLF inside a quoted note keeps the line count right.
    let s = loads(b"time [s],note,mass [mg]\r\n0,\"two\r\nlines\",1\r\n10,x,2\r\n");
    assert_eq!(s.line, vec![2, 4]);
    assert_eq!(s.value, vec![mg(1.0), mg(2.0)]);
}

// ---------------------------------------------------------------------- experiment files

fn fixture_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/experiments")
}

fn film() -> String {
    std::fs::read_to_string(fixture_dir().join("film_uptake.toml")).unwrap()
}

/// Line (from 1) of the `nth` (from 0) line of `text` containing `needle`.
fn nth_line_with(text: &str, needle: &str, nth: usize) -> u64 {
    text.lines()
        .enumerate()
        .filter(|(_, l)| l.contains(needle))
        .nth(nth)
        .map(|(i, _)| i as u64 + 1)
        .unwrap_or_else(|| panic!("'{needle}' not in the text"))
}

/// A malformed experiment made from the film fixture by replacing `from` with `to`.
struct TomlCase {
    name: &'static str,
    from: &'static str,
    to: &'static str,
    kind: InputKind,
    /// The key path, or `None` for syntax errors (which have a line and column instead).
    key: Option<&'static str>,
    /// The error's line: the `nth` line of the changed text holding this needle.
    line_of: (&'static str, usize),
}

fn run_toml_cases(cases: &[TomlCase]) -> usize {
    let good = film();
    for c in cases {
        assert!(
            good.contains(c.from),
            "{}: '{}' not in the fixture",
            c.name,
            c.from
        );
        let text = good.replacen(c.from, c.to, 1);
        let e = match experiment::from_str(&text, Path::new("x.toml"), &fixture_dir()) {
            Ok(_) => panic!("{}: should fail", c.name),
            Err(e) => e,
        };
        assert_eq!(e.input_kind(), Some(c.kind), "{}: {e}", c.name);
        let loc = e.location().cloned().unwrap_or_default();
        assert_eq!(
            loc.file.as_deref(),
            Some(Path::new("x.toml")),
            "{}: {e}",
            c.name
        );
        assert_eq!(loc.key.as_deref(), c.key, "{}: {e}", c.name);
        let (needle, nth) = c.line_of;
        assert_eq!(
            loc.line,
            Some(nth_line_with(&text, needle, nth)),
            "{}: {e}",
            c.name
        );
    }
    cases.len()
}

#[test]
fn duplicated_keys_and_tables_are_syntax_errors_at_the_second() {
    use InputKind::*;
    let n = run_toml_cases(&[
        TomlCase {
            name: "key twice",
            from: "thickness = \"120 um\"",
            to: "thickness = \"120 um\"\nthickness = \"130 um\"",
            kind: Syntax,
            key: None,
            line_of: ("thickness =", 1),
        },
        TomlCase {
            name: "table twice",
            from: "[initial]\nvalue = 0.0",
            to: "[initial]\nvalue = 0.0\n\n[initial]\nvalue = 1.0",
            kind: Syntax,
            key: None,
            line_of: ("[initial]", 1),
        },
        TomlCase {
            name: "parameter twice",
            from: "[parameters.h]",
            to: "[parameters.D]\nstart = \"1e-12 m2/s\"\n\n[parameters.h]",
            kind: Syntax,
            key: None,
            line_of: ("[parameters.D]", 1),
        },
        TomlCase {
            name: "inline key twice",
            from: "starts = { M_inf = \"-0.35 mg\", m0 = \"12.76 mg\" }",
            to: "starts = { M_inf = \"-0.35 mg\", M_inf = \"-0.3 mg\" }",
            kind: Syntax,
            key: None,
            line_of: ("starts =", 0),
        },
    ]);
    assert_eq!(n, 4);
}

/// Parameters cannot be defined from other parameters (docs/experiment-file.md), so a
/// circular definition cannot be written; the closest real cases are a parameter whose start
/// or bound names another parameter, two that name each other, and a key naming a parameter
/// that does not exist.
#[test]
fn parameters_naming_parameters_are_refused_where_written() {
    use InputKind::*;
    let n = run_toml_cases(&[
        TomlCase {
            name: "start names another",
            from: "start = \"2e-7 m/s\"",
            to: "start = \"D\"",
            kind: BadValue,
            key: Some("parameters.h.start"),
            line_of: ("start = \"D\"", 0),
        },
        TomlCase {
            name: "bound names another",
            from: "lower = \"1e-10 m/s\"",
            to: "lower = \"D\"",
            kind: BadValue,
            key: Some("parameters.h.lower"),
            line_of: ("lower = \"D\"", 0),
        },
        TomlCase {
            name: "undefined in a dataset's scale",
            from: "scale = \"M_inf\"\noffset = \"m0\"\n\n[[datasets]]",
            to: "scale = \"M_infinity\"\noffset = \"m0\"\n\n[[datasets]]",
            kind: UndefinedParameter,
            key: Some("datasets[0].scale"),
            line_of: ("M_infinity", 0),
        },
    ]);
    // D's start names h and h's start names D: refused at the first one resolved, never
    // followed round the loop.
    let text = film()
        .replacen("start = \"1.5e-12 m2/s\"", "start = \"h\"", 1)
        .replacen("start = \"2e-7 m/s\"", "start = \"D\"", 1);
    let e = experiment::from_str(&text, Path::new("x.toml"), &fixture_dir()).unwrap_err();
    assert_eq!(e.input_kind(), Some(BadValue), "{e}");
    let loc = e.location().unwrap();
    let key = loc.key.as_deref().unwrap_or_default();
    assert!(
        key == "parameters.D.start" || key == "parameters.h.start",
        "{e}"
    );
    assert!(loc.line.is_some(), "{e}");
    assert_eq!(n + 1, 4);
}

#[test]
fn truncated_experiment_files_are_located() {
    use InputKind::*;
    let good = film();
    // Cut inside a string.
    let cut = &good[..good.find("mg/cm3").unwrap()];
    let e = experiment::from_str(cut, Path::new("x.toml"), &fixture_dir()).unwrap_err();
    assert_eq!(e.input_kind(), Some(Syntax), "{e}");
    assert_eq!(
        e.location().unwrap().line,
        Some(nth_line_with(cut, "value_unit", 0))
    );
    // Cut after the first dataset's name: the rest of that table is missing.
    let cut = &good[..good.find("file = \"data/film/sorption.csv\"").unwrap()];
    let e = experiment::from_str(cut, Path::new("x.toml"), &fixture_dir()).unwrap_err();
    assert_eq!(e.input_kind(), Some(MissingKey), "{e}");
    let loc = e.location().unwrap();
    assert_eq!(loc.key.as_deref(), Some("datasets[0].file"), "{e}");
    assert!(loc.line.is_some(), "{e}");
    // Cut before any dataset.
    let cut = &good[..good.find("[[datasets]]").unwrap()];
    let e = experiment::from_str(cut, Path::new("x.toml"), &fixture_dir()).unwrap_err();
    assert_eq!(e.input_kind(), Some(MissingKey), "{e}");
    assert_eq!(
        e.location().unwrap().key.as_deref(),
        Some("datasets"),
        "{e}"
    );
    // Nothing left.
    let e = experiment::from_str("", Path::new("x.toml"), &fixture_dir()).unwrap_err();
    assert_eq!(e.input_kind(), Some(MissingKey), "{e}");
    assert_eq!(e.location().unwrap().key.as_deref(), Some("sample"), "{e}");
}

#[test]
fn huge_numbers_and_misplaced_units_in_experiment_files_are_located() {
    use InputKind::*;
    let n = run_toml_cases(&[
        TomlCase {
            name: "bare 1e400",
            from: "partition = 1.0\noutside = \"4.2 mg/cm3\"\n\n[ends.right",
            to: "partition = 1e400\noutside = \"4.2 mg/cm3\"\n\n[ends.right",
            kind: BadValue,
            key: Some("ends.left.transfer.partition"),
            line_of: ("1e400", 0),
        },
        TomlCase {
            name: "1e400 with unit",
            from: "thickness = \"120 um\"",
            to: "thickness = \"1e400 um\"",
            kind: BadValue,
            key: Some("sample.thickness"),
            line_of: ("thickness =", 0),
        },
        TomlCase {
            name: "integer beyond 64 bits",
            from: "[solver]\ntolerance = 1e-6",
            to: "[solver]\ntolerance = 1e-6\nmaximum_steps = 99999999999999999999",
            kind: BadValue,
            key: Some("solver.maximum_steps"),
            line_of: ("maximum_steps", 0),
        },
        TomlCase {
            name: "negative count",
            from: "[solver]\ntolerance = 1e-6",
            to: "[solver]\ntolerance = 1e-6\nmaximum_steps = -5",
            kind: BadValue,
            key: Some("solver.maximum_steps"),
            line_of: ("maximum_steps", 0),
        },
        TomlCase {
            name: "unit before number",
            from: "thickness = \"120 um\"",
            to: "thickness = \"um 120\"",
            kind: BadValue,
            key: Some("sample.thickness"),
            line_of: ("thickness =", 0),
        },
        TomlCase {
            name: "unit twice",
            from: "thickness = \"120 um\"",
            to: "thickness = \"120 um um\"",
            kind: UnknownUnit,
            key: Some("sample.thickness"),
            line_of: ("thickness =", 0),
        },
        TomlCase {
            name: "thousands separator",
            from: "thickness = \"120 um\"",
            to: "thickness = \"1,200 um\"",
            kind: UnknownUnit,
            key: Some("sample.thickness"),
            line_of: ("thickness =", 0),
        },
        TomlCase {
            name: "mass unit on a time",
            from: "time_origin = \"5 min\"",
            to: "time_origin = \"5 mg\"",
            kind: UnknownUnit,
            key: Some("datasets[1].time_origin"),
            line_of: ("time_origin", 0),
        },
        TomlCase {
            name: "unit inside a table row",
            from: "outside = \"4.2 mg/cm3\"\n\n[ends.right",
            to: "outside = { rows = [[0, \"4.2 mg/cm3\"]], time_unit = \"s\" }\n\n[ends.right",
            kind: BadValue,
            key: Some("ends.left.transfer.outside.rows[0]"),
            line_of: ("rows = ", 0),
        },
    ]);
    assert_eq!(n, 9);
}

#[test]
fn files_that_are_missing_or_folders_are_located() {
    use InputKind::*;
    let n = run_toml_cases(&[
        TomlCase {
            name: "data file is a folder",
            from: "file = \"data/film/sorption.csv\"",
            to: "file = \"data/film\"",
            kind: Unreadable,
            key: Some("datasets[0].file"),
            line_of: ("file = \"data/film\"", 0),
        },
        TomlCase {
            name: "empty file name",
            from: "file = \"data/film/sorption.csv\"",
            to: "file = \"\"",
            kind: Unreadable,
            key: Some("datasets[0].file"),
            line_of: ("file = \"\"", 0),
        },
        TomlCase {
            name: "signal file missing",
            from: "outside = \"4.2 mg/cm3\"\n\n[ends.right",
            to: "outside = { file = \"vapour.csv\", time_column = \"t\", value_column = \"c\" }\n\n[ends.right",
            kind: Unreadable,
            key: Some("ends.left.transfer.outside.file"),
            line_of: ("vapour.csv", 0),
        },
    ]);
    assert_eq!(n, 3);
    let dir = tempfile::tempdir().unwrap();
    // The experiment file itself missing, or a folder.
    let missing = dir.path().join("no-such.toml");
    let e = experiment::load(&missing).unwrap_err();
    assert_eq!(e.input_kind(), Some(Unreadable), "{e}");
    assert_eq!(
        e.location().unwrap().file.as_deref(),
        Some(missing.as_path())
    );
    let e = experiment::load(dir.path()).unwrap_err();
    assert_eq!(e.input_kind(), Some(Unreadable), "{e}");
    assert_eq!(e.location().unwrap().file.as_deref(), Some(dir.path()));
    assert!(e.to_string().contains("folder"), "{e}");
}

/// The film experiment and its data copied into a fresh folder, so files can be broken.
fn film_copy() -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("data/film");
    std::fs::create_dir_all(&data).unwrap();
    for f in ["sorption.csv", "desorption.csv"] {
        std::fs::copy(fixture_dir().join("data/film").join(f), data.join(f)).unwrap();
    }
    let exp = dir.path().join("film.toml");
    std::fs::write(&exp, film()).unwrap();
    (dir, exp)
}

fn load_err(path: &Path) -> Error {
    match experiment::load(path) {
        Ok(_) => panic!("{} should not load", path.display()),
        Err(e) => e,
    }
}

#[test]
fn experiment_file_encodings() {
    use InputKind::*;
    let (dir, exp) = film_copy();
    let text = film();
    // Latin-1 "é" in a comment on line 3.
    let mut bytes = text.as_bytes().to_vec();
    let at = text.find("Invented scenario").unwrap();
    bytes.splice(at..at, b"R\xe9sum\xe9: ".iter().copied());
    std::fs::write(&exp, &bytes).unwrap();
    let e = load_err(&exp);
    assert_eq!(e.input_kind(), Some(Encoding), "{e}");
    assert_eq!(e.location().unwrap().line, Some(3), "{e}");
    // UTF-16 with and without byte-order mark.
    for (name, bytes) in [
        (
            "UTF-16 LE BOM",
            [vec![0xFF, 0xFE], utf16(&text, false)].concat(),
        ),
        ("UTF-16 LE", utf16(&text, false)),
        ("UTF-16 BE", utf16(&text, true)),
    ] {
        std::fs::write(&exp, bytes).unwrap();
        let e = load_err(&exp);
        assert_eq!(e.input_kind(), Some(Encoding), "{name}: {e}");
        assert_eq!(e.location().unwrap().line, Some(1), "{name}: {e}");
        assert!(e.to_string().contains("UTF-16"), "{name}: {e}");
    }
    drop(dir);
}

/// Parameter start values and the first dataset's data of an experiment, for comparing two
/// loads of the same experiment written differently.
fn fingerprint(e: &Experiment) -> (Vec<f64>, Vec<f64>) {
    let starts = e.start_values();
    let ds = &e.datasets[0];
    (starts, [ds.observed.clone(), ds.sigma.to_vec()].concat())
}

#[test]
fn experiment_files_a_user_expects_to_work_load_the_same_values() {
    let (dir, exp) = film_copy();
    let reference = fingerprint(&experiment::load(&exp).unwrap());
    let text = film();
    let variants: [(&str, Vec<u8>); 4] = [
        (
            "UTF-8 BOM",
            [b"\xef\xbb\xbf".to_vec(), text.as_bytes().to_vec()].concat(),
        ),
        ("CRLF", text.replace('\n', "\r\n").into_bytes()),
        // Old-Mac line endings are not TOML; they are read as LF (this failed before).
        ("CR only", text.replace('\n', "\r").into_bytes()),
        ("trailing blank lines", format!("{text}\n\n\n").into_bytes()),
    ];
    for (name, bytes) in variants {
        std::fs::write(&exp, bytes).unwrap();
        match experiment::load(&exp) {
            Ok(e) => assert_eq!(fingerprint(&e), reference, "{name}"),
            Err(e) => panic!("{name} should load: {e}"),
        }
    }
    // A CR-only file with an error names the right line.
    let bad = text
        .replacen("thickness = \"120 um\"", "thicknes = \"120 um\"", 1)
        .replace('\n', "\r");
    std::fs::write(&exp, bad).unwrap();
    let e = load_err(&exp);
    assert_eq!(e.input_kind(), Some(InputKind::UnknownKey), "{e}");
    assert_eq!(
        e.location().unwrap().line,
        Some(nth_line_with(&text, "thickness =", 0)),
        "{e}"
    );
    // The data file with CR-only endings, BOM and a Latin-1 comment loads the same.
    std::fs::write(&exp, &text).unwrap();
    let csv = dir.path().join("data/film/sorption.csv");
    let original = std::fs::read(&csv).unwrap();
    let mut odd = b"\xef\xbb\xbf# balance r\xe9f. 7\r".to_vec();
    odd.extend(original.iter().map(|&b| if b == b'\n' { b'\r' } else { b }));
    std::fs::write(&csv, odd).unwrap();
    let e = experiment::load(&exp).unwrap();
    assert_eq!(fingerprint(&e), reference, "odd but valid data file");
}

#[test]
fn errors_in_a_data_file_named_by_the_experiment_are_located_in_that_file() {
    let (dir, exp) = film_copy();
    let csv = dir.path().join("data/film/sorption.csv");
    let original = std::fs::read_to_string(&csv).unwrap();
    let header_line = nth_line_with(&original, "time [min]", 0);
    let cases: Vec<(&str, String, InputKind, u64, &str)> = vec![
        (
            "unit in a cell",
            original.replacen("2,12.4912,0.003", "2,12.4912 mg,0.003", 1),
            InputKind::NotANumber,
            header_line + 2,
            "mass [mg]",
        ),
        (
            "unclosed quote",
            original.replacen("2,12.4912,0.003", "2,12.4912,\"0.003", 1),
            InputKind::Syntax,
            header_line + 2,
            "u_mass [mg]",
        ),
        (
            "value column renamed",
            original.replacen("mass [mg],u_mass", "weight [mg],u_mass", 1),
            InputKind::UnknownColumn,
            header_line,
            "",
        ),
    ];
    for (name, text, kind, line, column) in cases {
        std::fs::write(&csv, text).unwrap();
        let e = load_err(&exp);
        assert_eq!(e.input_kind(), Some(kind), "{name}: {e}");
        let loc = e.location().unwrap();
        assert_eq!(loc.file.as_deref(), Some(csv.as_path()), "{name}: {e}");
        assert_eq!(loc.line, Some(line), "{name}: {e}");
        assert_eq!(loc.column.as_deref().unwrap_or(""), column, "{name}: {e}");
    }
}

// ------------------------------------------------------------------------------ the binary

fn fickfit() -> Command {
    Command::new(env!("CARGO_BIN_EXE_fickfit"))
}

/// Run the binary; assert exit code 2 and one line `fickfit: ...` holding every `needle`.
fn refused(args: &[&std::ffi::OsStr], needles: &[&str]) -> String {
    let out = fickfit().args(args).output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.starts_with("fickfit: "), "{err}");
    assert_eq!(err.trim_end().lines().count(), 1, "one line: {err}");
    for n in needles {
        assert!(err.contains(n), "'{n}' missing: {err}");
    }
    err
}

#[test]
fn the_binary_exits_2_with_one_located_line() {
    let (dir, exp) = film_copy();
    let text = film();
    let check = std::ffi::OsStr::new("check");
    // UTF-16 experiment file.
    std::fs::write(&exp, utf16(&text, false)).unwrap();
    refused(
        &[check, exp.as_os_str()],
        &["film.toml", "line 1", "UTF-16"],
    );
    // A data file with an unclosed quote.
    std::fs::write(&exp, &text).unwrap();
    let csv = dir.path().join("data/film/sorption.csv");
    let original = std::fs::read_to_string(&csv).unwrap();
    std::fs::write(&csv, original.replacen("5,12.5364", "\"5,12.5364", 1)).unwrap();
    let line = nth_line_with(&original, "5,12.5364", 0).to_string();
    refused(
        &[check, exp.as_os_str()],
        &[
            "sorption.csv",
            &format!("line {line}"),
            "column 'time [min]'",
            "quote",
        ],
    );
    std::fs::write(&csv, &original).unwrap();
    // A folder as data file, through `fit`: refused before any report folder is made.
    std::fs::write(
        &exp,
        text.replacen("data/film/sorption.csv", "data/film", 1),
    )
    .unwrap();
    let out_dir = dir.path().join("report");
    refused(
        &[
            std::ffi::OsStr::new("fit"),
            exp.as_os_str(),
            std::ffi::OsStr::new("--out"),
            out_dir.as_os_str(),
        ],
        &["film.toml", "key 'datasets[0].file'", "folder"],
    );
    assert!(!out_dir.exists());
    // A folder, and a missing file, as the experiment.
    refused(&[check, dir.path().as_os_str()], &["folder"]);
    let missing = dir.path().join("gone.toml");
    refused(&[check, missing.as_os_str()], &["gone.toml"]);
    // A huge number in the experiment file.
    std::fs::write(&exp, text.replacen("\"120 um\"", "\"1e400 um\"", 1)).unwrap();
    refused(
        &[check, exp.as_os_str()],
        &["film.toml", "key 'sample.thickness'", "1e400"],
    );
}
