//! Fuzz target: the CSV loader on arbitrary bytes, in its three shapes and with the reading
//! options chosen by the first byte. Holds when no input panics, none gives an internal error,
//! and every input error names at least the file.
#![no_main]

use fickfit::data::{
    self, ColumnSpec, ProfileColumns, ProfileTime, ReadOptions, SensorColumns, SensorSpec,
    SeriesColumns,
};
use fickfit::Error;
use libfuzzer_sys::fuzz_target;

fn check<T>(r: Result<T, Error>) {
    match r {
        Ok(_) => {}
        Err(Error::Internal(m)) => panic!("internal error: {m}"),
        Err(e) => {
            if let Some(loc) = e.location() {
                assert!(loc.file.is_some(), "input error without a file: {e}");
            }
            // Messages quote cells cut short: an input of any size gives a short message.
            assert!(
                e.to_string().len() < 2_000,
                "message of {} bytes",
                e.to_string().len()
            );
        }
    }
}

fuzz_target!(|input: &[u8]| {
    let (choice, bytes) = match input.split_first() {
        Some((c, rest)) => (*c, rest),
        None => (0, input),
    };
    let opts = ReadOptions {
        delimiter: match choice & 3 {
            1 => Some(b';'),
            2 => Some(b'\t'),
            3 => Some(b','),
            _ => None,
        },
        decimal_comma: choice & 4 != 0,
        time_origin: (choice & 8 != 0).then_some(5.0),
        min_points: usize::from(choice >> 6),
        sample_extent: (choice & 16 != 0).then_some((0.0, 1e-3)),
    };
    let series = SeriesColumns {
        sigma: (choice & 32 != 0).then(|| ColumnSpec::new("s")),
        run: (choice & 32 != 0).then(|| "run".to_string()),
        ..SeriesColumns::new("time", "mass")
    };
    check(data::read_time_series_from(
        bytes, "fuzz.csv", &series, &opts,
    ));
    let sensors = SensorColumns {
        time: ColumnSpec::new("time"),
        sensors: vec![SensorSpec {
            column: ColumnSpec::new("mass"),
            position: Some(1e-4),
        }],
    };
    check(data::read_sensor_table_from(
        bytes, "fuzz.csv", &sensors, &opts,
    ));
    let profiles = ProfileColumns {
        position: ColumnSpec::new("x"),
        value: ColumnSpec::new("mass"),
        sigma: None,
        time: if choice & 32 != 0 {
            ProfileTime::Column(ColumnSpec::new("time"))
        } else {
            ProfileTime::Fixed(60.0)
        },
    };
    check(data::read_profiles_from(
        bytes, "fuzz.csv", &profiles, &opts,
    ));
});
