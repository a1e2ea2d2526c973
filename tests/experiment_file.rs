//! The experiment file: the three documented examples load and carry the values written in
//! them (unit conversions checked against the SI definitions), parameters are shared between
//! runs, and every kind of input error is reported with its kind, key path and line.

use std::path::{Path, PathBuf};

use fickfit::experiment::{self, Experiment, Sigmas, Weighting};
use fickfit::model::{DiffusivityLaw, EndCondition, Initial, Shape, Signal};
use fickfit::solver::{Observable, Solver, SolverOptions};
use fickfit::{Error, InputKind};
use proptest::prelude::*;

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/experiments")
}

fn load(name: &str) -> Experiment {
    match experiment::load(dir().join(name)) {
        Ok(e) => e,
        Err(e) => panic!("{name} should load: {e}"),
    }
}

/// Relative closeness (common practice for comparing converted decimals).
fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-12 * a.abs().max(b.abs())
}

// 0 °C = 273.15 K exactly; 1 µm = 1e-6 m; 1 mg = 1e-6 kg; 1 min = 60 s; 1 mm²/s = 1e-6 m²/s
// (BIPM SI Brochure, 9th ed., 2019, section 2.3.1 and Table 8 — from memory).
const ZERO_C: f64 = 273.15;

#[test]
fn film_example_loads_with_values_as_written() {
    let e = load("film_uptake.toml");
    let names: Vec<&str> = e.parameters.iter().map(|p| p.name.as_str()).collect();
    assert_eq!(
        names,
        [
            "D",
            "h",
            "M_inf[sorption]",
            "m0[sorption]",
            "M_inf[desorption]",
            "m0[desorption]"
        ]
    );
    let d = &e.parameters[0];
    assert!(
        close(d.start, 1.5e-12) && close(d.lower.unwrap(), 1e-15) && close(d.upper.unwrap(), 1e-9)
    );
    assert!(d.free && d.log && d.unit == "m2/s");
    let m = &e.parameters[4];
    assert!(
        close(m.start, -0.35e-6),
        "per-dataset start of the desorption run: {}",
        m.start
    );
    assert!(!m.log, "a signed amount is not log-transformed");
    assert!(close(m.to_unit(m.start), -0.35));

    let p = e.start_values();
    let sorption = e.datasets[0].model_for(&p).unwrap();
    assert_eq!(sorption.geometry.shape, Shape::Slab);
    assert!(close(sorption.geometry.thickness(), 1.2e-4), "120 um");
    assert_eq!(
        sorption.geometry.layers[0].diffusivity,
        DiffusivityLaw::constant(1.5e-12)
    );
    assert_eq!(sorption.initial, Initial::Uniform(0.0));
    let EndCondition::Transfer {
        coefficient,
        partition,
        outside,
    } = &sorption.right
    else {
        panic!("right end should be a transfer: {:?}", sorption.right)
    };
    assert!(close(*coefficient, 2e-7) && *partition == 1.0 && *outside == Signal::Constant(4.2));

    let desorption = e.datasets[1].model_for(&p).unwrap();
    assert_eq!(
        desorption.initial,
        Initial::Uniform(4.2),
        "per-run initial state"
    );
    assert_eq!(
        desorption.left,
        EndCondition::transfer(2e-7, 1.0, 0.0),
        "per-run end"
    );

    let s = &e.datasets[0];
    assert_eq!(s.request.observables, vec![Observable::FractionalUptake]);
    assert_eq!(s.len(), 16);
    assert!(
        close(s.observed[0], 12.4095e-6),
        "first mass, 12.4095 mg in kg: {}",
        s.observed[0]
    );
    assert!(s.sigma.iter().all(|&x| close(x, 3e-9)));
    assert_eq!(s.sigma.len(), 16);
    // A column of sigma is held per reading (this one happens to be constant).
    assert!(matches!(s.sigma, Sigmas::Each(_)), "{:?}", s.sigma);
    assert!(close(s.sigma[15], 3e-9));
    // A series of one quantity reads the solver's values in order.
    assert!(s.reads_in_order());
    assert!(s.outputs().enumerate().all(|(i, m)| m == (0, i)));
    assert_eq!(s.outputs().len(), 16);
    assert_eq!(s.weighting, Weighting::Absolute);
    assert_eq!(s.lines[0], 3, "after a comment and the header");
    assert!(close(s.request.times[1], 120.0), "2 min");

    let r = &e.datasets[1];
    assert_eq!(
        r.len(),
        16,
        "baseline rows before the 5 min origin are left out"
    );
    assert_eq!(r.request.times[0], 0.0);
    assert!(close(r.request.times[1], 120.0));
    assert_eq!(r.lines[0], 6, "first row at or after the origin");
    assert!(
        r.sigma.iter().all(|&x| close(x, 3e-9)),
        "constant sigma 0.003 mg"
    );
    // A constant sigma is held once, not once per reading.
    assert!(
        matches!(r.sigma, Sigmas::Shared { value, len: 16 } if close(value, 3e-9)),
        "{:?}",
        r.sigma
    );
    assert_eq!(r.sigma.iter().len(), 16);
    assert_eq!(e.free_count(), 6);
    assert_eq!(e.fit.interval_level, 0.95);
}

#[test]
fn one_diffusivity_is_shared_by_both_runs() {
    let e = load("film_uptake.toml");
    let i = e.parameter_index("D").unwrap();
    let mut p = e.start_values();
    p[i] = 7.0e-13;
    for d in e.datasets.iter() {
        let m = d.model_for(&p).unwrap();
        assert_eq!(
            m.geometry.layers[0].diffusivity,
            DiffusivityLaw::constant(7.0e-13),
            "{}",
            d.name
        );
    }
    // The per-run amount is not shared.
    let j = e.parameter_index("M_inf[sorption]").unwrap();
    let k = e.parameter_index("M_inf[desorption]").unwrap();
    assert_ne!(j, k);
    // A vector of the wrong length is refused, not read out of range.
    assert!(e.datasets[0].model_for(&p[..3]).is_err());
}

#[test]
fn predictions_apply_scale_and_offset() {
    let e = load("film_uptake.toml");
    let p = e.start_values();
    let d = &e.datasets[0];
    let model = d.model_for(&p).unwrap();
    let mut solver = Solver::new(SolverOptions::default()).unwrap();
    let sol = solver.solve(&model, &d.request).unwrap();
    let f = d.predict(&p, sol).unwrap();
    assert_eq!(f.len(), d.len());
    // mass = m0 + M_inf · F, and F(0) = 0, F → 1 (definition of fractional uptake).
    let m0 = p[e.parameter_index("m0[sorption]").unwrap()];
    let minf = p[e.parameter_index("M_inf[sorption]").unwrap()];
    assert!(close(f[0], m0), "{} vs {m0}", f[0]);
    let series = sol.series(0);
    for (k, fk) in f.iter().enumerate() {
        assert!((fk - (m0 + minf * series[k])).abs() <= 1e-18);
    }
    assert!(f[15] > f[1] && f[15] <= m0 + minf * (1.0 + 1e-9));
}

#[test]
fn heated_rod_example_loads() {
    let e = load("heated_rod.toml");
    assert_eq!(e.parameters.len(), 2);
    let p = e.start_values();
    assert!(close(p[0], 30e-6), "30 mm2/s");
    assert!(!e.parameters[1].log, "transform = none is kept");
    let d = &e.datasets[0];
    let m = d.model_for(&p).unwrap();
    assert!(close(m.geometry.thickness(), 0.2));
    assert_eq!(m.initial, Initial::Uniform(22.0 + ZERO_C));
    assert!(close(m.sources.exchange_rate, 1e-3));
    assert!(close(m.sources.exchange_value, 22.0 + ZERO_C));
    let EndCondition::Value(Signal::Table(rows)) = &m.left else {
        panic!(
            "the heater end should be a time table from the file: {:?}",
            m.left
        )
    };
    assert_eq!(rows.len(), 10);
    assert_eq!(rows[0], (0.0, 22.0 + ZERO_C));
    assert!(close(rows[4].1, 80.0 + ZERO_C) && rows[4].0 == 120.0);
    assert_eq!(m.right, EndCondition::transfer(4e-6, 1.0, 22.0 + ZERO_C));
    let xs: Vec<Observable> = [0.02, 0.06, 0.10, 0.14]
        .iter()
        .map(|&x| Observable::ValueAt(x))
        .collect();
    assert_eq!(d.request.observables.len(), 4);
    for (a, b) in d.request.observables.iter().zip(&xs) {
        let (Observable::ValueAt(a), Observable::ValueAt(b)) = (a, b) else {
            panic!()
        };
        assert!(close(*a, *b));
    }
    assert_eq!(d.request.times.len(), 21);
    assert_eq!(d.len(), 84);
    assert!(close(d.observed[0], 22.02 + ZERO_C), "T1 at t = 0");
    assert!(
        close(d.observed[21], 21.96 + ZERO_C),
        "T2 at t = 0 (sensor-major order)"
    );
    assert_eq!(d.output_of(21), (1, 0));
    assert!(!d.reads_in_order(), "two sensors: not one series in order");
    assert!(
        d.sigma.iter().all(|&s| close(s, 0.1)),
        "0.1 degC of sigma is 0.1 K"
    );
}

#[test]
fn depth_profiles_example_loads() {
    let e = load("depth_profiles.toml");
    let p = e.start_values();
    let d = &e.datasets[0];
    let m = d.model_for(&p).unwrap();
    assert!(close(m.geometry.thickness(), 2e-3));
    assert_eq!(
        m.geometry.layers[0].diffusivity,
        DiffusivityLaw::Exponential {
            d0: 5e-13,
            beta: 0.5,
            u_ref: 150.0
        }
    );
    assert_eq!(m.left, EndCondition::value(150.0));
    assert_eq!(m.right, EndCondition::Sealed);
    assert_eq!(d.request.times, vec![3600.0, 14400.0, 57600.0]);
    assert_eq!(d.request.observables.len(), 10, "ten distinct depths");
    assert_eq!(d.len(), 30);
    // Row 3 of the second profile: 50 um at 4 h.
    assert_eq!(d.output_of(12), (2, 1));
    assert_eq!(d.positions[12].map(|x| (x * 1e6).round()), Some(50.0));
    assert_eq!(d.lines[0], 3);
    assert_eq!(d.weighting, Weighting::Scaled);
    assert!(e.parameters.iter().any(|p| p.name == "beta" && !p.log));
}

#[test]
fn data_paths_resolve_relative_to_the_experiment_file() {
    let tmp = tempfile::tempdir().unwrap();
    let sub = tmp.path().join("study");
    std::fs::create_dir_all(sub.join("data/film")).unwrap();
    for f in ["sorption.csv", "desorption.csv"] {
        std::fs::copy(
            dir().join("data/film").join(f),
            sub.join("data/film").join(f),
        )
        .unwrap();
    }
    std::fs::copy(dir().join("film_uptake.toml"), sub.join("film_uptake.toml")).unwrap();
    let e = experiment::load(sub.join("film_uptake.toml")).unwrap();
    assert_eq!(e.datasets[0].file, sub.join("data/film/sorption.csv"));
    assert_eq!(e.datasets[0].file_as_written, "data/film/sorption.csv");
    // The same text read with another base directory does not find the data.
    let text = std::fs::read_to_string(sub.join("film_uptake.toml")).unwrap();
    let err = experiment::from_str(&text, Path::new("film_uptake.toml"), tmp.path()).unwrap_err();
    assert_eq!(err.input_kind(), Some(InputKind::Unreadable));
}

/// Load a broken fixture; return the error, the fixture text.
fn broken(name: &str) -> (Error, String) {
    let path = dir().join("errors").join(name);
    let text = std::fs::read_to_string(&path).unwrap();
    match experiment::load(&path) {
        Ok(_) => panic!("{name} should not load"),
        Err(e) => (e, text),
    }
}

/// Line (from 1) of the first line of `text` containing `needle`.
fn line_with(text: &str, needle: &str) -> u64 {
    text.lines()
        .position(|l| l.contains(needle))
        .map(|i| i as u64 + 1)
        .unwrap_or_else(|| panic!("'{needle}' not in fixture"))
}

fn expect(name: &str, kind: InputKind, key: &str, line_of: &str) -> String {
    let (e, text) = broken(name);
    assert_eq!(e.input_kind(), Some(kind), "{name}: {e}");
    let loc = e.location().unwrap();
    assert_eq!(loc.key.as_deref(), Some(key), "{name}: {e}");
    assert_eq!(loc.line, Some(line_with(&text, line_of)), "{name}: {e}");
    assert!(
        loc.file.as_ref().is_some_and(|f| f.ends_with(name)),
        "{name}: {e}"
    );
    e.to_string()
}

#[test]
fn unknown_key_is_located_with_a_suggestion() {
    let m = expect(
        "unknown_key.toml",
        InputKind::UnknownKey,
        "sample.thicknes",
        "thicknes =",
    );
    assert!(m.contains("did you mean 'thickness'"), "{m}");
    assert!(m.contains("allowed here") && m.contains("radius"), "{m}");
}

#[test]
fn unknown_choice_gets_a_suggestion() {
    let m = expect(
        "unknown_choice.toml",
        InputKind::BadValue,
        "sample.shape",
        "shape =",
    );
    assert!(
        m.contains("did you mean 'slab'") && m.contains("slap"),
        "{m}"
    );
}

#[test]
fn wrong_type_names_key_and_value() {
    let m = expect(
        "wrong_type.toml",
        InputKind::BadValue,
        "solver.tolerance",
        "tolerance =",
    );
    assert!(m.contains("tight"), "{m}");
}

#[test]
fn missing_key_names_the_table() {
    let (e, text) = broken("missing_key.toml");
    assert_eq!(e.input_kind(), Some(InputKind::MissingKey), "{e}");
    let loc = e.location().unwrap();
    assert_eq!(loc.key.as_deref(), Some("datasets[0].layout"), "{e}");
    // The line is within the first [[datasets]] table.
    let start = line_with(&text, "[[datasets]]");
    let line = loc.line.unwrap();
    assert!(
        line >= start && line < line_with(&text, "name = \"desorption\""),
        "{e}"
    );
}

#[test]
fn unknown_unit_is_located() {
    let m = expect(
        "unknown_unit.toml",
        InputKind::UnknownUnit,
        "sample.thickness",
        "thickness =",
    );
    assert!(m.contains("furlong"), "{m}");
}

#[test]
fn undefined_parameter_is_located() {
    let m = expect(
        "undefined_parameter.toml",
        InputKind::UndefinedParameter,
        "sample.diffusivity",
        "diffusivity =",
    );
    assert!(
        m.contains("D_film") && m.contains("defined: D, M_inf, h, m0"),
        "{m}"
    );
}

#[test]
fn bounds_in_wrong_order() {
    expect(
        "bounds_order.toml",
        InputKind::BadBounds,
        "parameters.D.lower",
        "lower = \"1e-9",
    );
}

#[test]
fn bounds_that_exclude_the_start() {
    expect(
        "bounds_exclude_start.toml",
        InputKind::BadBounds,
        "parameters.D.start",
        "start = \"1.5e-8",
    );
}

#[test]
fn self_reference_is_refused() {
    let m = expect(
        "self_reference.toml",
        InputKind::BadValue,
        "parameters.h.start",
        "start = \"h\"",
    );
    assert!(m.contains("itself"), "{m}");
}

#[test]
fn negative_thickness_is_a_bad_value() {
    let m = expect(
        "negative_thickness.toml",
        InputKind::BadValue,
        "sample.thickness",
        "thickness =",
    );
    assert!(m.contains("-120 um"), "{m}");
}

#[test]
fn unreadable_data_file_names_both_paths() {
    let m = expect(
        "unreadable.toml",
        InputKind::Unreadable,
        "datasets[0].file",
        "no_such_run.csv",
    );
    assert!(
        m.contains("'../data/film/no_such_run.csv'"),
        "as written: {m}"
    );
    let resolved = dir().join("errors").join("../data/film/no_such_run.csv");
    assert!(
        m.contains(&resolved.display().to_string()),
        "as resolved: {m}"
    );
}

#[test]
fn too_few_points_for_the_free_parameters() {
    let (e, _) = broken("too_few_points.toml");
    assert_eq!(e.input_kind(), Some(InputKind::TooFewPoints), "{e}");
    assert!(
        e.to_string()
            .contains("3 data points for 4 free parameters"),
        "{e}"
    );
}

#[test]
fn syntax_error_has_line_and_column() {
    let (e, text) = broken("syntax.toml");
    assert_eq!(e.input_kind(), Some(InputKind::Syntax), "{e}");
    assert_eq!(
        e.location().unwrap().line,
        Some(line_with(&text, "thickness =")),
        "{e}"
    );
    assert!(e.to_string().contains("column"), "{e}");
}

#[test]
fn inline_errors_name_their_keys() {
    let base = dir();
    let good = std::fs::read_to_string(base.join("film_uptake.toml")).unwrap();
    let cases = [
        // (replace, with, kind, key)
        (
            "value = 0.0\n",
            "value = 0.0\nvalue_unt = \"K\"\n",
            InputKind::UnknownKey,
            "initial.value_unt",
        ),
        (
            "coefficient = \"h\"\npartition = 1.0\noutside = \"4.2 mg/cm3\"\n\n[ends.right",
            "coefficient = \"h\"\npartition = -1.0\noutside = \"4.2 mg/cm3\"\n\n[ends.right",
            InputKind::BadValue,
            "ends.left.transfer.partition",
        ),
        (
            "sigma = \"0.003 mg\"",
            "sigma = \"0.003 mg\"\nsigma_column = \"mass\"",
            InputKind::BadValue,
            "datasets[1].sigma",
        ),
        (
            "starts = { M_inf",
            "starts = { D = \"1e-12 m2/s\", M_inf",
            InputKind::BadValue,
            "datasets[1].starts.D",
        ),
        (
            "[parameters.m0]",
            "[parameters.unused]\nstart = 1.0\n\n[parameters.m0]",
            InputKind::BadValue,
            "parameters.unused",
        ),
        (
            "[datasets.ends.right.transfer]\ncoefficient = \"h\"",
            "[datasets.ends.right.transfer]\ncoeficient = \"h\"",
            InputKind::UnknownKey,
            "datasets[1].ends.right.transfer.coeficient",
        ),
        (
            "[ends.left.transfer]\ncoefficient = \"h\"\npartition = 1.0\noutside = \"4.2 mg/cm3\"",
            "[ends.left.transfer]\ncoefficient = \"h\"\npartition = 1.0\noutside = { rows = [[0, 1.0]], time_unt = \"s\" }",
            InputKind::UnknownKey,
            "ends.left.transfer.outside.time_unt",
        ),
        (
            "diffusivity = \"D\"",
            "diffusivity = { law = \"exponential\", d0 = \"D\", beta = 1.0 }",
            InputKind::MissingKey,
            "sample.diffusivity.u_ref",
        ),
        (
            "outside = 0.0\n\n[datasets.ends.right",
            "outside = \"0 K\"\n\n[datasets.ends.right",
            InputKind::UnknownUnit,
            "datasets[1].ends.left.transfer.outside",
        ),
        // Finite as written, infinite in SI: 1e307 d ≈ 8.6e311 s exceeds the double range
        // (IEEE 754, common practice).
        (
            "time_origin = \"5 min\"",
            "time_origin = \"1e307 d\"",
            InputKind::NotFinite,
            "datasets[1].time_origin",
        ),
        // TOML allows bare nan and inf; a table row must still be finite numbers.
        (
            "outside = \"4.2 mg/cm3\"\n\n[ends.right",
            "outside = { rows = [[0, 4.2], [600, nan]], time_unit = \"s\" }\n\n[ends.right",
            InputKind::NotFinite,
            "ends.left.transfer.outside.rows",
        ),
    ];
    for (from, to, kind, key) in cases {
        assert!(good.contains(from), "{from}");
        let text = good.replacen(from, to, 1);
        let e = experiment::from_str(&text, Path::new("x.toml"), &base).unwrap_err();
        assert_eq!(e.input_kind(), Some(kind), "{key}: {e}");
        assert_eq!(
            e.location().and_then(|l| l.key.as_deref()),
            Some(key),
            "{e}"
        );
        assert!(e.location().and_then(|l| l.line).is_some(), "{e}");
    }
}

proptest! {
    #![proptest_config(ProptestConfig {
        cases: 256,
        failure_persistence: None,
        rng_algorithm: proptest::test_runner::RngAlgorithm::ChaCha,
        rng_seed: proptest::test_runner::RngSeed::Fixed(0x7011_F11E),
        ..ProptestConfig::default()
    })]

    /// Arbitrary text never panics the reader: it loads or gives an error.
    #[test]
    fn arbitrary_text_never_panics(text in "\\PC{0,400}") {
        let _ = experiment::from_str(&text, Path::new("any.toml"), &dir());
    }

    /// Lines of the real example, shuffled and cut, never panic either (these reach the
    /// resolver, not only the TOML reader).
    #[test]
    fn mangled_examples_never_panic(seed in any::<u64>(), keep in 0usize..80) {
        let good = std::fs::read_to_string(dir().join("film_uptake.toml")).unwrap();
        let mut lines: Vec<&str> = good.lines().collect();
        let n = lines.len();
        let mut s = seed;
        for i in (1..n).rev() {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            if s >> 60 == 0 {
                lines.swap(i, (s >> 33) as usize % (i + 1));
            }
        }
        lines.truncate(keep.min(n));
        let text = lines.join("\n");
        let _ = experiment::from_str(&text, Path::new("any.toml"), &dir());
    }
}

#[test]
fn documented_examples_are_the_fixtures() {
    let doc = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/experiment-file.md"),
    )
    .unwrap();
    for f in ["film_uptake.toml", "heated_rod.toml", "depth_profiles.toml"] {
        let text = std::fs::read_to_string(dir().join(f)).unwrap();
        assert!(
            doc.contains(&format!("```toml\n{text}```")),
            "docs/experiment-file.md should show {f} verbatim"
        );
    }
}

#[test]
fn sensor_outside_the_sample_is_refused() {
    let text = std::fs::read_to_string(dir().join("heated_rod.toml")).unwrap();
    let bad = text.replace("position = \"140 mm\"", "position = \"240 mm\"");
    let e = experiment::from_str(&bad, Path::new("rod.toml"), &dir()).unwrap_err();
    assert_eq!(e.input_kind(), Some(InputKind::PositionOutside), "{e}");
}

#[test]
fn every_example_solves_at_its_start_values() {
    for f in ["film_uptake.toml", "heated_rod.toml", "depth_profiles.toml"] {
        let e = load(f);
        let p = e.start_values();
        let mut solver = Solver::new(e.solver.clone()).unwrap();
        for d in e.datasets.iter() {
            let model = d.model_for(&p).unwrap();
            let sol = solver
                .solve(&model, &d.request)
                .unwrap_or_else(|err| panic!("{f} {}: {err}", d.name));
            let pred = d.predict(&p, sol).unwrap();
            assert_eq!(pred.len(), d.len());
            assert!(pred.iter().all(|v| v.is_finite()), "{f} {}", d.name);
        }
    }
    // The rod at t = 0 reads the initial 22 °C at every sensor (model of the file).
    let e = load("heated_rod.toml");
    let d = &e.datasets[0];
    let p = e.start_values();
    let mut solver = Solver::new(e.solver.clone()).unwrap();
    let sol = solver.solve(&d.model_for(&p).unwrap(), &d.request).unwrap();
    let pred = d.predict(&p, sol).unwrap();
    for (i, (_, k)) in d.outputs().enumerate() {
        if k == 0 {
            assert!((pred[i] - (22.0 + ZERO_C)).abs() < 1e-9, "{}", pred[i]);
        }
    }
}

/// A minimal experiment around a given [sample] and [ends] text, fitting the film sorption data.
fn minimal(sample_and_ends: &str) -> String {
    format!(
        "{sample_and_ends}\n[initial]\nvalue = 0\n\n[parameters.D]\nstart = \"1e-12 m2/s\"\n\n\
         [[datasets]]\nname = \"run\"\nfile = \"data/film/sorption.csv\"\nlayout = \"time_series\"\n\
         observe = \"fractional_uptake\"\ntime_column = \"time\"\nvalue_column = \"mass\"\n"
    )
}

#[test]
fn radial_and_layered_samples() {
    // Hollow cylinder: thickness = outer − inner radius.
    let text = minimal(
        "[sample]\nshape = \"cylinder\"\nvalue_unit = \"fraction\"\nradius = \"5 mm\"\n\
         inner_radius = \"2 mm\"\ndiffusivity = \"D\"\n[ends.left]\nsealed = true\n[ends.right]\nvalue = 1\n",
    );
    let e = experiment::from_str(&text, Path::new("c.toml"), &dir()).unwrap();
    let m = e.datasets[0].model_for(&e.start_values()).unwrap();
    assert_eq!(m.geometry.shape, Shape::Cylinder);
    assert!(close(m.geometry.inner_radius, 2e-3) && close(m.geometry.thickness(), 3e-3));

    // Solid sphere: the centre needs no left end.
    let text = minimal(
        "[sample]\nshape = \"sphere\"\nvalue_unit = \"fraction\"\nradius = \"0.4 mm\"\n\
         diffusivity = \"D\"\n[ends.right]\nvalue = 1\n",
    );
    let e = experiment::from_str(&text, Path::new("s.toml"), &dir()).unwrap();
    let m = e.datasets[0].model_for(&e.start_values()).unwrap();
    assert_eq!(m.left, EndCondition::Sealed);
    assert!(close(m.geometry.outer(), 4e-4));

    // ... and refuses a value at its centre.
    let text = minimal(
        "[sample]\nshape = \"sphere\"\nvalue_unit = \"fraction\"\nradius = \"0.4 mm\"\n\
         diffusivity = \"D\"\n[ends.left]\nvalue = 1\n[ends.right]\nvalue = 1\n",
    );
    let err = experiment::from_str(&text, Path::new("s.toml"), &dir()).unwrap_err();
    assert_eq!(err.input_kind(), Some(InputKind::BadValue), "{err}");
    assert_eq!(err.location().unwrap().key.as_deref(), Some("ends.left"));
    assert_eq!(err.location().unwrap().line, Some(6));

    // Two layers with a partition ratio; a slab takes no radius.
    let text = minimal(
        "[sample]\nshape = \"slab\"\nvalue_unit = \"fraction\"\n\
         [[sample.layers]]\nthickness = \"20 um\"\ndiffusivity = \"3e-14 m2/s\"\npartition_to_next = 0.5\n\
         [[sample.layers]]\nthickness = \"0.1 mm\"\ndiffusivity = \"D\"\n\
         [ends.left]\nvalue = 1\n[ends.right]\nsealed = true\n",
    );
    let e = experiment::from_str(&text, Path::new("l.toml"), &dir()).unwrap();
    let m = e.datasets[0].model_for(&e.start_values()).unwrap();
    assert_eq!(m.geometry.layers.len(), 2);
    assert!(
        close(m.geometry.layers[0].thickness, 2e-5) && close(m.geometry.layers[1].thickness, 1e-4)
    );
    assert_eq!(m.geometry.layers[0].partition_to_next, 0.5);
    assert_eq!(
        m.geometry.layers[0].diffusivity,
        DiffusivityLaw::constant(3e-14)
    );

    let text = minimal(
        "[sample]\nshape = \"slab\"\nvalue_unit = \"fraction\"\nthickness = \"1 mm\"\nradius = \"1 mm\"\n\
         diffusivity = \"D\"\n[ends.left]\nvalue = 1\n[ends.right]\nvalue = 1\n",
    );
    let err = experiment::from_str(&text, Path::new("r.toml"), &dir()).unwrap_err();
    assert_eq!(
        err.location().unwrap().key.as_deref(),
        Some("sample.radius"),
        "{err}"
    );
}

#[test]
fn signals_from_tables_and_periods() {
    let text = minimal(
        "[sample]\nshape = \"slab\"\nvalue_unit = \"degC\"\nthickness = \"1 mm\"\ndiffusivity = \"D\"\n\
         [ends.left]\nvalue = { rows = [[0, 20], [2, 40]], time_unit = \"min\" }\n\
         [ends.right]\nflux = { mean = \"2 K mm/s\", amplitude = \"1 K mm/s\", period = \"1 h\", phase = \"90 deg\" }\n",
    )
    .replace("value = 0\n", "value = \"20 degC\"\n");
    let e = experiment::from_str(&text, Path::new("p.toml"), &dir()).unwrap();
    let m = e.datasets[0].model_for(&e.start_values()).unwrap();
    assert_eq!(
        m.left,
        EndCondition::Value(Signal::Table(vec![
            (0.0, 20.0 + ZERO_C),
            (120.0, 40.0 + ZERO_C)
        ]))
    );
    let EndCondition::Flux(Signal::Periodic {
        mean,
        amplitude,
        period,
        phase,
    }) = m.right
    else {
        panic!("{:?}", m.right)
    };
    // A flux of temperature is a difference: no 273.15 K offset; 1 mm = 1e-3 m; 90° = π/2.
    assert!(close(mean, 2e-3) && close(amplitude, 1e-3) && close(period, 3600.0));
    assert!(close(phase, std::f64::consts::FRAC_PI_2));
}

#[test]
fn misspelt_parameter_name_gets_a_suggestion() {
    let good = std::fs::read_to_string(dir().join("film_uptake.toml")).unwrap();
    let text = good.replacen("scale = \"M_inf\"", "scale = \"M_ifn\"", 1);
    let e = experiment::from_str(&text, Path::new("x.toml"), &dir()).unwrap_err();
    assert_eq!(e.input_kind(), Some(InputKind::UndefinedParameter), "{e}");
    assert_eq!(
        e.location().unwrap().key.as_deref(),
        Some("datasets[0].scale")
    );
    assert!(e.to_string().contains("did you mean 'M_inf'"), "{e}");
}

/// One file holding two runs, told apart by a run column: each dataset takes its own rows.
#[test]
fn run_column_selects_one_run_of_a_shared_file() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("both.csv"),
        "run,time [min],mass [mg]\nA,0,1.0\nA,10,1.5\nA,20,1.8\nB,0,2.0\nB,5,2.2\nB,10,2.3\nB,15,2.35\n",
    )
    .unwrap();
    let dataset = |name: &str, run: &str| {
        format!(
            "[[datasets]]\nname = \"{name}\"\nfile = \"both.csv\"\nlayout = \"time_series\"\n\
             observe = \"amount_change\"\ntime_column = \"time\"\nvalue_column = \"mass\"\n\
             run_column = \"run\"\nrun = \"{run}\"\n"
        )
    };
    let head = "[sample]\nshape = \"slab\"\nvalue_unit = \"mg/cm3\"\nthickness = \"100 um\"\n\
                diffusivity = \"1e-12 m2/s\"\n[ends.left]\nvalue = 1.0\n[ends.right]\nsealed = true\n\
                [initial]\nvalue = 0.0\n";
    let text = format!("{head}{}{}", dataset("first", "A"), dataset("second", "B"));
    let e = fickfit::experiment::from_str(&text, std::path::Path::new("runs.toml"), dir.path())
        .unwrap();
    assert_eq!(e.datasets[0].len(), 3);
    assert_eq!(e.datasets[1].len(), 4);
    assert_eq!(e.datasets[1].lines, vec![5, 6, 7, 8]);
    // A run label that is not in the file names the ones that are.
    let bad = format!("{head}{}", dataset("third", "C"));
    let err = fickfit::experiment::from_str(&bad, std::path::Path::new("runs.toml"), dir.path())
        .unwrap_err()
        .to_string();
    assert!(err.contains("'C'") && err.contains("A, B"), "{err}");
}

/// Rows before the time origin are kept as the baseline and reported, not silently dropped.
#[test]
fn baseline_rows_are_reported() {
    let e = fickfit::experiment::load(dir().join("film_uptake.toml")).unwrap();
    let d = e.datasets.iter().find(|d| d.name == "desorption").unwrap();
    let w = d
        .warnings
        .iter()
        .find(|w| w.kind == fickfit::data::WarningKind::Baseline)
        .expect("a baseline warning");
    assert!(
        w.message.contains("before the time origin"),
        "{}",
        w.message
    );
    assert!(w.location.line.is_some());
}
