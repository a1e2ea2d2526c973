//! Load time of a 10^6-row time-series CSV file (time, mass, uncertainty), the size a
//! long logger run produces. Run with `cargo bench --bench csv_load`.

use std::fmt::Write as _;
use std::hint::black_box;

use criterion::{criterion_group, criterion_main, Criterion};
use fickfit::data::{self, ColumnSpec, ReadOptions, SeriesColumns};

const ROWS: usize = 1_000_000;

fn big_file() -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = match tempfile::tempdir() {
        Ok(d) => d,
        Err(e) => panic!("cannot make a temporary folder: {e}"),
    };
    let path = dir.path().join("uptake_1e6.csv");
    let mut text = String::with_capacity(ROWS * 32);
    text.push_str("# synthetic uptake curve\ntime [s],mass [mg],sigma [mg]\n");
    for i in 0..ROWS {
        let t = i as f64 * 0.5;
        let m = 1.0 - (-t / 1.0e5).exp();
        let _ = writeln!(text, "{t},{m:.6},0.001");
    }
    if let Err(e) = std::fs::write(&path, text) {
        panic!("cannot write {}: {e}", path.display());
    }
    (dir, path)
}

fn load(c: &mut Criterion) {
    let (_dir, path) = big_file();
    let cols = SeriesColumns {
        sigma: Some(ColumnSpec::new("sigma")),
        ..SeriesColumns::new("time", "mass")
    };
    let opts = ReadOptions::default();
    match data::read_time_series(&path, &cols, &opts) {
        Ok(l) => assert_eq!(l.data[0].time.len(), ROWS),
        Err(e) => panic!("the benchmark file should load: {e}"),
    }
    let mut group = c.benchmark_group("csv_load");
    group.sample_size(10);
    group.bench_function("time_series_1e6_rows", |b| {
        b.iter(|| black_box(data::read_time_series(&path, &cols, &opts)))
    });
    // Floor for comparison: the csv crate alone, parsing the same three numbers per row.
    group.bench_function("csv_crate_floor_1e6_rows", |b| {
        b.iter(|| {
            let mut rdr = match csv::ReaderBuilder::new()
                .comment(Some(b'#'))
                .from_path(&path)
            {
                Ok(r) => r,
                Err(e) => panic!("{e}"),
            };
            let mut rec = csv::ByteRecord::new();
            let mut cols = [Vec::new(), Vec::new(), Vec::new()];
            while let Ok(true) = rdr.read_byte_record(&mut rec) {
                for (c, v) in cols.iter_mut().enumerate() {
                    let x = std::str::from_utf8(rec.get(c).unwrap_or(b""))
                        .ok()
                        .and_then(|s| s.parse::<f64>().ok())
                        .unwrap_or(f64::NAN);
                    v.push(x);
                }
            }
            black_box(cols)
        })
    });
    group.finish();
}

criterion_group!(benches, load);
criterion_main!(benches);
