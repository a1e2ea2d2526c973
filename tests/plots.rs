//! Figures of the report: every kind renders to well-formed SVG carrying its labels and
//! legend, PNGs decode at the stated size and are not blank, odd data (zeros on a log axis,
//! NaN, unequal lengths, nothing at all) never fails, output is deterministic, and the
//! normal Q–Q positions match a hand computation.

use std::path::Path;
use std::time::Instant;

use fickfit::report::plot::{
    arrhenius_figure, correlation_png, correlation_svg, normal_qq_points, profile_figure,
    qq_figure, residual_figure, to_png, to_svg, ArrheniusLine, Figure, Guide, LegendPosition,
    ProfileCurve, Series, SeriesKind, Stroke, DEFAULT_HEIGHT, DEFAULT_WIDTH,
};
use fickfit::report::plot::{
    thinned_markers, thinned_note, DRAW_ALL_UP_TO, DRAW_BINS, QQ_SPACED, QQ_TAIL,
};
use fickfit::Error;
use quick_xml::events::Event;
use quick_xml::Reader;

// ---------------------------------------------------------------------------------------
// helpers

/// Parses `svg` as XML (failing the test on any syntax error) and returns the content of
/// every `<text>` element, with character and entity references resolved.
fn svg_texts(svg: &str) -> Vec<String> {
    let mut reader = Reader::from_str(svg);
    let mut texts = Vec::new();
    let mut current: Option<String> = None;
    let mut saw_svg_root = false;
    loop {
        match reader.read_event() {
            Ok(Event::Start(e)) => {
                let name = e.name();
                if name.as_ref() == b"svg" {
                    saw_svg_root = true;
                }
                if name.as_ref() == b"text" {
                    current = Some(String::new());
                }
            }
            Ok(Event::End(e)) => {
                if e.name().as_ref() == b"text" {
                    if let Some(t) = current.take() {
                        texts.push(t.trim().to_string());
                    }
                }
            }
            Ok(Event::Text(t)) => {
                if let Some(c) = current.as_mut() {
                    c.push_str(&t.decode().expect("UTF-8 text"));
                }
            }
            Ok(Event::GeneralRef(r)) => {
                if let Some(c) = current.as_mut() {
                    let name = r.decode().expect("UTF-8 reference");
                    let resolved = match name.as_ref() {
                        "lt" => "<".to_string(),
                        "gt" => ">".to_string(),
                        "amp" => "&".to_string(),
                        "quot" => "\"".to_string(),
                        "apos" => "'".to_string(),
                        _ => match r.resolve_char_ref() {
                            Ok(Some(ch)) => ch.to_string(),
                            other => panic!("unknown reference &{name}; ({other:?})"),
                        },
                    };
                    c.push_str(&resolved);
                }
            }
            Ok(Event::Eof) => break,
            Ok(_) => {}
            Err(e) => panic!(
                "SVG is not well-formed XML at byte {}: {e}",
                reader.buffer_position()
            ),
        }
    }
    assert!(saw_svg_root, "no <svg> root element");
    texts
}

/// Asserts that some `<text>` element of `svg` contains `needle`.
fn assert_has_text(texts: &[String], needle: &str) {
    assert!(
        texts.iter().any(|t| t.contains(needle)),
        "no text element contains {needle:?}; texts: {texts:?}"
    );
}

/// Decodes the PNG at `path`; returns (width, height, number of pixels that differ from the
/// top-left pixel, which is background in every figure).
fn png_stats(path: &Path) -> (u32, u32, usize) {
    let file = std::fs::File::open(path).expect("PNG exists");
    let mut reader = png::Decoder::new(std::io::BufReader::new(file))
        .read_info()
        .expect("PNG header decodes");
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).expect("PNG data decodes");
    let bytes = &buf[..info.buffer_size()];
    let channels = info.color_type.samples();
    let background = &bytes[..channels];
    let differing = bytes
        .chunks_exact(channels)
        .filter(|px| *px != background)
        .count();
    (info.width, info.height, differing)
}

/// Renders `fig` to PNG in a fresh folder and checks size and non-blankness.
fn check_png(fig: &Figure) {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("figure.png");
    to_png(fig, &path).expect("PNG renders");
    let (w, h, differing) = png_stats(&path);
    assert_eq!((w, h), (fig.width, fig.height));
    // Frame, ticks, labels and data: a few thousand pixels at least (common practice; a
    // blank image has none).
    assert!(
        differing > 1000,
        "PNG looks blank: {differing} pixels differ"
    );
    // The temporary file was renamed away: the folder holds only the figure.
    let names: Vec<_> = std::fs::read_dir(dir.path())
        .expect("read dir")
        .map(|e| e.expect("entry").file_name())
        .collect();
    assert_eq!(names, vec![std::ffi::OsString::from("figure.png")]);
}

/// An uptake curve: fractional uptake against √t, data and model. The values are made up
/// (the plot layer does not care); the model is the early-time relation
/// M_t/M_∞ = (4/L)·√(D t/π) capped at 1 for shape only.
fn uptake_figure() -> Figure {
    let sqrt_t: Vec<f64> = (1..=12).map(|i| f64::from(i) * 0.5).collect();
    let data: Vec<f64> = sqrt_t
        .iter()
        .enumerate()
        .map(|(i, s)| (0.18 * s).min(1.0) + if i % 2 == 0 { 0.01 } else { -0.01 })
        .collect();
    let model_x: Vec<f64> = (0..=60).map(|i| f64::from(i) * 0.1).collect();
    let model_y: Vec<f64> = model_x.iter().map(|s| (0.18 * s).min(1.0)).collect();
    Figure::new("Uptake of film A", "√time [h^½]", "M_t/M_∞")
        .with_series(Series::markers(
            "film A (data)",
            sqrt_t.clone(),
            data.clone(),
        ))
        .with_series(Series::line("film A (model)", model_x, model_y))
        .with_series(Series::markers(
            "film B (data)",
            sqrt_t,
            data.iter().map(|v| v * 0.8).collect(),
        ))
        .with_legend(LegendPosition::LowerRight)
}

/// A depth profile over several decades with zeros, a negative value and a NaN in it.
fn depth_profile_figure() -> Figure {
    let depth: Vec<f64> = (0..15).map(|i| f64::from(i) * 0.5).collect();
    let mut conc: Vec<f64> = depth.iter().map(|x| 1e21 * (-x * x / 4.0).exp()).collect();
    conc[3] = 0.0;
    conc[7] = f64::NAN;
    conc[9] = -5.0;
    conc[14] = 0.0;
    let model_x: Vec<f64> = (0..=70).map(|i| f64::from(i) * 0.1).collect();
    let model_y: Vec<f64> = model_x
        .iter()
        .map(|x| 1e21 * (-x * x / 4.0).exp())
        .collect();
    Figure::new("Depth profile", "depth [µm]", "concentration [1/cm³]")
        .with_log_y(true)
        .with_series(Series::markers("measured", depth, conc))
        .with_series(Series::line("Gaussian fit", model_x, model_y))
}

fn correlation_example() -> (Vec<&'static str>, Vec<Vec<f64>>) {
    (
        vec!["D", "k_s", "C_eq"],
        vec![
            vec![1.0, -0.93, 0.12],
            vec![-0.93, 1.0, 0.41],
            vec![0.12, 0.41, 1.0],
        ],
    )
}

fn profile_example() -> ProfileCurve {
    let values: Vec<f64> = (0..21).map(|i| 1.0 + 0.05 * f64::from(i)).collect();
    let delta: Vec<f64> = values.iter().map(|v| ((v - 1.5) / 0.2).powi(2)).collect();
    ProfileCurve {
        parameter: "D [10⁻¹² m²/s]".to_string(),
        objective: "Δχ²".to_string(),
        values,
        delta,
        threshold: 3.84,
        lower: Some(1.5 - 0.2 * 3.84f64.sqrt()),
        upper: Some(1.5 + 0.2 * 3.84f64.sqrt()),
        level: 0.95,
    }
}

fn arrhenius_example() -> Figure {
    // D = D0 exp(-Ea/(R T)) with D0 = 1e-6 m²/s, Ea = 80 kJ/mol, at five temperatures,
    // plus one invalid measurement (D = 0) that must be left out.
    let r = fickfit::report::plot::GAS_CONSTANT;
    let t = vec![573.15, 623.15, 673.15, 723.15, 773.15, 800.0];
    let mut d: Vec<f64> = t.iter().map(|t| 1e-6 * (-80e3 / (r * t)).exp()).collect();
    d[5] = 0.0;
    arrhenius_figure(
        &t,
        &d,
        Some(ArrheniusLine {
            pre_factor: 1e-6,
            activation_energy: 80e3,
        }),
    )
}

// ---------------------------------------------------------------------------------------
// x–y figure

#[test]
fn xy_figure_svg_is_xml_with_labels_and_legend() {
    let out = to_svg(&uptake_figure()).expect("renders");
    let texts = svg_texts(&out.svg);
    for needle in [
        "Uptake of film A",
        "√time [h^½]",
        "M_t/M_∞",
        "film A (data)",
        "film A (model)",
        "film B (data)",
    ] {
        assert_has_text(&texts, needle);
    }
    assert!(out.notes.is_empty(), "unexpected notes {:?}", out.notes);
    assert!(out.svg.contains(&format!("width=\"{DEFAULT_WIDTH}\"")));
    assert!(out.svg.contains(&format!("height=\"{DEFAULT_HEIGHT}\"")));
}

#[test]
fn xy_figure_png_decodes_and_is_not_blank() {
    check_png(&uptake_figure());
}

#[test]
fn series_are_told_apart_without_colour() {
    // Three marker series: filled circle, open square, filled triangle (a polygon). Two line
    // series: solid, then dashed (many short segments instead of one polyline).
    let x = vec![1.0, 2.0, 3.0];
    let fig = Figure::new("shapes", "x [m]", "y [m]")
        .with_series(Series::markers("a", x.clone(), vec![1.0, 2.0, 3.0]))
        .with_series(Series::markers("b", x.clone(), vec![2.0, 3.0, 4.0]))
        .with_series(Series::markers("c", x.clone(), vec![3.0, 4.0, 5.0]))
        .with_series(Series::line("solid", x.clone(), vec![1.5, 2.5, 3.5]))
        .with_series(Series::line("dashed", x, vec![2.5, 3.5, 4.5]));
    let svg = to_svg(&fig).expect("renders").svg;
    svg_texts(&svg);
    assert!(svg.contains("<circle"), "no circle marker");
    assert!(svg.contains("<polygon"), "no triangle marker");
    // Background plus at least three open squares (plot and legend) are rectangles.
    assert!(svg.matches("<rect").count() >= 4, "no square markers");
    // A dashed line of the second line series is drawn as many separate pieces.
    let dashed = svg.matches("stroke=\"#D55E00\"").count();
    assert!(
        dashed > 10,
        "second line series is not dashed ({dashed} pieces)"
    );
}

#[test]
fn log_axis_with_zeros_negative_and_nan_does_not_fail_and_says_so() {
    let fig = depth_profile_figure();
    let out = to_svg(&fig).expect("renders despite zeros and NaN");
    assert_eq!(out.notes.non_finite, 1);
    assert_eq!(out.notes.non_positive_on_log, 3);
    assert!(!out.notes.no_points);
    let texts = svg_texts(&out.svg);
    assert_has_text(&texts, "depth [µm]");
    assert_has_text(&texts, "concentration [1/cm³]");
    assert_has_text(&texts, "measured");
    assert_has_text(&texts, "Gaussian fit");
    // The omission is printed in the figure, not only returned.
    assert_has_text(&texts, "3 points with y ≤ 0 left out");
    assert_has_text(&texts, "1 point with a non-finite value left out");
    let notes = to_png(&fig, tempfile::tempdir().expect("dir").path().join("p.png"))
        .expect("PNG renders too");
    assert_eq!(notes, out.notes);
    check_png(&fig);
}

#[test]
fn nothing_finite_gives_an_empty_frame_with_a_note() {
    let fig = Figure::new("nothing", "time [h]", "mass [mg]")
        .with_log_y(true)
        .with_series(Series::markers(
            "all bad",
            vec![1.0, f64::NAN],
            vec![0.0, 1.0],
        ))
        .with_series(Series::line("empty", vec![], vec![]));
    let out = to_svg(&fig).expect("renders an empty frame");
    assert!(out.notes.no_points);
    let texts = svg_texts(&out.svg);
    assert_has_text(&texts, "no finite data points to show");
    assert_has_text(&texts, "time [h]");
    check_png(&fig);

    let bare = Figure::new("no series at all", "x [m]", "y [m]");
    let out = to_svg(&bare).expect("renders");
    assert!(out.notes.no_points);
    svg_texts(&out.svg);
}

#[test]
fn unequal_lengths_and_infinities_are_counted_not_fatal() {
    let fig = Figure::new("odd", "x [m]", "y [m]").with_series(Series {
        label: "odd".to_string(),
        x: vec![1.0, 2.0, f64::INFINITY, 4.0, 5.0],
        y: vec![1.0, 2.0, 3.0],
        kind: SeriesKind::LineAndMarkers,
    });
    let out = to_svg(&fig).expect("renders");
    assert_eq!(out.notes.unpaired, 2);
    assert_eq!(out.notes.non_finite, 1);
    svg_texts(&out.svg);
}

#[test]
fn single_point_and_constant_series_get_a_usable_range() {
    // A zero-span range must not reach the drawing library (it would divide by zero).
    let fig = Figure::new("one point", "x [m]", "y [m]")
        .with_series(Series::markers("p", vec![3.0], vec![0.0]))
        .with_guide(Guide::vertical(3.0, "", Stroke::Dotted));
    let out = to_svg(&fig).expect("renders");
    svg_texts(&out.svg);
    let fig = fig.with_log_y(true);
    let out = to_svg(&fig).expect("renders on log axis");
    assert!(out.notes.no_points);
}

#[test]
fn output_is_deterministic() {
    let fig = depth_profile_figure();
    let a = to_svg(&fig).expect("renders").svg;
    let b = to_svg(&fig).expect("renders").svg;
    assert_eq!(a, b);

    let dir = tempfile::tempdir().expect("dir");
    let (p1, p2) = (dir.path().join("a.png"), dir.path().join("b.png"));
    to_png(&fig, &p1).expect("renders");
    to_png(&fig, &p2).expect("renders");
    assert_eq!(
        std::fs::read(&p1).expect("read"),
        std::fs::read(&p2).expect("read")
    );

    let (names, m) = correlation_example();
    assert_eq!(
        correlation_svg(&names, &m).expect("renders").svg,
        correlation_svg(&names, &m).expect("renders").svg
    );
}

#[test]
fn png_into_a_missing_folder_is_an_io_error() {
    let dir = tempfile::tempdir().expect("dir");
    let path = dir.path().join("no-such-folder").join("f.png");
    let err = to_png(&uptake_figure(), &path).expect_err("cannot write there");
    assert!(matches!(err, Error::Io { .. }), "got {err:?}");
    assert!(!path.exists());
}

#[test]
fn png_replaces_an_existing_file_whole() {
    let dir = tempfile::tempdir().expect("dir");
    let path = dir.path().join("f.png");
    std::fs::write(&path, b"old contents").expect("write");
    to_png(&uptake_figure(), &path).expect("renders");
    let (w, h, _) = png_stats(&path);
    assert_eq!((w, h), (DEFAULT_WIDTH, DEFAULT_HEIGHT));
}

#[test]
fn custom_size_is_honoured() {
    let fig = uptake_figure().with_size(400, 300);
    let svg = to_svg(&fig).expect("renders").svg;
    assert!(svg.contains("width=\"400\"") && svg.contains("height=\"300\""));
    check_png(&fig);
}

// ---------------------------------------------------------------------------------------
// residuals, Q–Q, profile, Arrhenius

#[test]
fn residual_figure_has_zero_line_and_markers() {
    let t = vec![0.5, 1.0, 2.0, 4.0, 8.0];
    let fig = residual_figure(
        "Residuals",
        "time [h]",
        "residual [mg]",
        vec![
            Series::line("run 1", t.clone(), vec![0.1, -0.2, 0.05, 0.0, -0.1]),
            Series::markers("run 2", t, vec![-0.05, 0.15, f64::NAN, 0.1, 0.02]),
        ],
    );
    assert!(fig.series.iter().all(|s| s.kind == SeriesKind::Markers));
    assert_eq!(fig.guides.len(), 1);
    assert_eq!(fig.guides[0].value, 0.0);
    let out = to_svg(&fig).expect("renders");
    assert_eq!(out.notes.non_finite, 1);
    // Negative residuals are drawn on a linear axis (they were once counted as below the
    // floor of a logarithmic axis and left out).
    assert_eq!(out.notes.out_of_range, 0, "{:?}", out.notes.messages);
    let texts = svg_texts(&out.svg);
    for needle in ["Residuals", "time [h]", "residual [mg]", "run 1", "run 2"] {
        assert_has_text(&texts, needle);
    }
    check_png(&fig);
}

#[test]
fn qq_positions_match_hand_computation_for_n_4() {
    // Blom (1958) plotting positions p_i = (i − 0.375)/(n + 0.25), n = 4:
    //   p = 0.625/4.25, 1.625/4.25, 2.625/4.25, 3.625/4.25
    //     = 0.1470588235, 0.3823529412, 0.6176470588, 0.8529411765
    // Standard normal quantiles Φ⁻¹(p), computed with Python 3's statistics.NormalDist
    // (Wichura's AS 241 algorithm, an independent implementation from statrs):
    //   −1.0491313979639711, −0.29930691046566704, 0.29930691046566704, 1.0491313979639711
    // The NaN is left out before ranking, so n = 4, not 5.
    let qq = normal_qq_points(&[0.7, -1.3, f64::NAN, 0.1, -0.2]);
    assert_eq!(qq.skipped_non_finite, 1);
    assert_eq!(qq.sample, vec![-1.3, -0.2, 0.1, 0.7]);
    let expected = [
        -1.0491313979639711,
        -0.29930691046566704,
        0.29930691046566704,
        1.0491313979639711,
    ];
    assert_eq!(qq.theoretical.len(), 4);
    for (got, want) in qq.theoretical.iter().zip(expected) {
        approx::assert_abs_diff_eq!(*got, want, epsilon = 1e-9);
    }
    // Symmetry of the positions: p_i + p_{n+1−i} = 1 exactly (common practice).
    approx::assert_abs_diff_eq!(qq.theoretical[0], -qq.theoretical[3], epsilon = 1e-12);
}

#[test]
fn qq_figure_renders_with_reference_line() {
    let r = [0.3, -1.1, 0.8, 1.9, -0.4, 0.05, -2.2, 0.6, f64::INFINITY];
    let fig = qq_figure(&r);
    let line = fig
        .series
        .iter()
        .find(|s| s.kind == SeriesKind::Reference)
        .expect("reference line");
    assert_eq!(line.x, line.y, "reference line is y = x");
    let out = to_svg(&fig).expect("renders");
    let texts = svg_texts(&out.svg);
    for needle in [
        "Normal Q–Q plot",
        "standard normal quantile Φ⁻¹(p)",
        "standardised residual",
        "reference y = x",
        "residuals (n = 8)",
        "1 non-finite residual left out",
    ] {
        assert_has_text(&texts, needle);
    }
    check_png(&fig);
    // No residual at all: still a figure.
    let out = to_svg(&qq_figure(&[])).expect("renders");
    assert!(out.notes.no_points);
}

#[test]
fn profile_figure_marks_threshold_and_interval() {
    let curve = profile_example();
    let fig = profile_figure(&curve);
    assert!(fig
        .guides
        .iter()
        .any(|g| g.value == 3.84 && g.stroke == Stroke::Dashed));
    assert_eq!(fig.guides.len(), 3, "threshold plus two interval ends");
    let out = to_svg(&fig).expect("renders");
    let texts = svg_texts(&out.svg);
    for needle in [
        "D [10⁻¹² m²/s]",
        "Δχ²",
        "profile",
        "threshold Δχ² = 3.84",
        "95 % interval [1.10808, 1.89192]",
    ] {
        assert_has_text(&texts, needle);
    }
    check_png(&fig);

    // An interval open on one side is said to be open.
    let open = ProfileCurve {
        upper: None,
        ..profile_example()
    };
    let texts = svg_texts(&to_svg(&profile_figure(&open)).expect("renders").svg);
    assert_has_text(&texts, "95 % interval [1.10808, open]");
}

#[test]
fn arrhenius_figure_has_ln_d_against_inverse_temperature() {
    let fig = arrhenius_example();
    let data = &fig.series[0];
    assert_eq!(data.x.len(), 5, "the D = 0 measurement is left out");
    // x = 1000/T: T = 573.15 K gives 1.744744... (arithmetic).
    approx::assert_abs_diff_eq!(data.x[0], 1000.0 / 573.15, epsilon = 1e-12);
    // The line and the exact points agree: ln D = ln D0 − Ea/(R T).
    let line = &fig.series[1];
    let r = fickfit::report::plot::GAS_CONSTANT;
    approx::assert_abs_diff_eq!(
        line.y[0],
        (1e-6f64).ln() - 80e3 / (r * 773.15),
        epsilon = 1e-9
    );
    let out = to_svg(&fig).expect("renders");
    let texts = svg_texts(&out.svg);
    for needle in [
        "Arrhenius plot",
        "1000/T [1/K]",
        "ln(D / (m²/s))",
        "measured D",
        "fit: E_a = 80 kJ/mol",
        "1 measurement with T ≤ 0 K, D ≤ 0 or a missing value left out",
    ] {
        assert_has_text(&texts, needle);
    }
    check_png(&fig);
}

#[test]
fn temperature_history_with_units_renders() {
    let t: Vec<f64> = (0..50).map(f64::from).collect();
    let temp: Vec<f64> = t
        .iter()
        .map(|t| 20.0 + 60.0 * (1.0 - (-t / 10.0).exp()))
        .collect();
    let fig = Figure::new("Rod, sensor 2", "time [h]", "temperature [°C]")
        .with_series(Series::markers("sensor 2", t.clone(), temp.clone()))
        .with_series(Series::line("model", t, temp))
        .with_legend(LegendPosition::LowerRight);
    let texts = svg_texts(&to_svg(&fig).expect("renders").svg);
    assert_has_text(&texts, "temperature [°C]");
}

// ---------------------------------------------------------------------------------------
// correlation heat map

#[test]
fn correlation_heat_map_prints_names_and_values() {
    let (names, m) = correlation_example();
    let out = correlation_svg(&names, &m).expect("renders");
    assert!(out.notes.is_empty());
    let texts = svg_texts(&out.svg);
    for needle in ["D", "k_s", "C_eq", "-0.93", "0.12", "0.41", "1.00"] {
        assert_has_text(&texts, needle);
    }
    // Dark cell (−0.93) gets white text, light cell (0.12) black text.
    let dark = out
        .svg
        .lines()
        .find(|l| l.contains("<text") && l.contains("fill=\"#FFFFFF\""));
    assert!(dark.is_some(), "no white text on a dark cell");

    let dir = tempfile::tempdir().expect("dir");
    let path = dir.path().join("corr.png");
    correlation_png(&names, &m, &path).expect("renders");
    let (w, h, differing) = png_stats(&path);
    assert_eq!((w, h), (640, 480));
    assert!(differing > 1000);
}

#[test]
fn correlation_heat_map_handles_nan_empty_and_long_names() {
    let names = ["diffusion coefficient", "surface transfer coefficient"];
    let m = vec![vec![1.0, f64::NAN], vec![f64::NAN, 1.0]];
    let out = correlation_svg(&names, &m).expect("renders");
    assert_eq!(out.notes.non_finite, 2);
    let texts = svg_texts(&out.svg);
    assert_has_text(&texts, "n/a");
    assert_has_text(&texts, "surface transfer coefficient");

    let none: [&str; 0] = [];
    let out = correlation_svg(&none, &[]).expect("renders");
    assert!(out.notes.no_points);
    svg_texts(&out.svg);
}

#[test]
fn correlation_matrix_of_wrong_shape_is_refused() {
    let err = correlation_svg(&["a", "b"], &[vec![1.0, 0.2]]).expect_err("one row for two names");
    assert!(matches!(err, Error::Internal(_)), "got {err:?}");
    let err = correlation_svg(&["a", "b"], &[vec![1.0, 0.2], vec![0.2]]).expect_err("short row");
    assert!(matches!(err, Error::Internal(_)), "got {err:?}");
}

// ---------------------------------------------------------------------------------------
// rough timing, no assertion on time: `cargo test --test plots -- --ignored --nocapture`

#[test]
#[ignore = "timing printout, run by hand"]
fn rough_render_timing() {
    let fig = uptake_figure();
    let dir = tempfile::tempdir().expect("dir");
    let path = dir.path().join("t.png");
    // Warm up (font registration, first allocation).
    to_svg(&fig).expect("renders");
    to_png(&fig, &path).expect("renders");
    let n = 20;
    let start = Instant::now();
    for _ in 0..n {
        to_svg(&fig).expect("renders");
    }
    let svg = start.elapsed() / n;
    let start = Instant::now();
    for _ in 0..n {
        to_png(&fig, &path).expect("renders");
    }
    let png = start.elapsed() / n;
    let (names, m) = correlation_example();
    let start = Instant::now();
    for _ in 0..n {
        correlation_svg(&names, &m).expect("renders");
    }
    let corr = start.elapsed() / n;
    println!(
        "one SVG: {svg:?}, one PNG (incl. encode + write): {png:?}, one heat-map SVG: {corr:?}"
    );
}

/// Writes one PNG and one SVG of every figure kind into the folder named by the environment
/// variable `FICKFIT_PLOT_GALLERY`, for looking at them by eye.
#[test]
#[ignore = "writes a gallery for inspection by eye, run by hand"]
fn gallery_for_inspection() {
    let Some(dir) = std::env::var_os("FICKFIT_PLOT_GALLERY") else {
        return;
    };
    let dir = std::path::PathBuf::from(dir);
    let figures = [
        ("uptake", uptake_figure()),
        ("depth_profile", depth_profile_figure()),
        (
            "residuals",
            residual_figure(
                "Residuals",
                "time [h]",
                "residual [mg]",
                vec![Series::markers(
                    "run 1",
                    vec![0.5, 1.0, 2.0, 4.0, 8.0],
                    vec![0.1, -0.2, 0.05, 0.0, -0.1],
                )],
            ),
        ),
        (
            "qq",
            qq_figure(&[0.3, -1.1, 0.8, 1.9, -0.4, 0.05, -2.2, 0.6]),
        ),
        ("profile", profile_figure(&profile_example())),
        ("arrhenius", arrhenius_example()),
        ("empty", Figure::new("nothing", "time [h]", "mass [mg]")),
    ];
    for (name, fig) in &figures {
        to_png(fig, dir.join(format!("{name}.png"))).expect("renders");
        let svg = to_svg(fig).expect("renders").svg;
        std::fs::write(dir.join(format!("{name}.svg")), svg).expect("write");
    }
    let (names, m) = correlation_example();
    correlation_png(&names, &m, dir.join("correlation.png")).expect("renders");
    let long = [
        "diffusion coefficient",
        "surface transfer",
        "C_eq",
        "offset",
    ];
    let m4 = vec![
        vec![1.0, -0.93, 0.12, 0.0],
        vec![-0.93, 1.0, 0.41, -0.5],
        vec![0.12, 0.41, 1.0, f64::NAN],
        vec![0.0, -0.5, f64::NAN, 1.0],
    ];
    correlation_png(&long, &m4, dir.join("correlation_long.png")).expect("renders");
}

#[test]
fn extreme_magnitudes_and_tiny_sizes_do_not_fail() {
    let figs = [
        Figure::new("tiny numbers", "x [m]", "y [m]").with_series(Series::markers(
            "a",
            vec![1e-300, 2e-300, 3e-300],
            vec![1e299, 1.2e299, 1.5e299],
        )),
        Figure::new("huge span", "x [m]", "y [m]")
            .with_log_y(true)
            .with_series(Series::line("b", vec![0.0, 1.0], vec![1e-300, 1e300])),
        Figure::new("near max", "x [m]", "y [m]").with_series(Series::markers(
            "c",
            vec![-1.7e308, 1.7e308],
            vec![f64::MAX, f64::MAX],
        )),
        uptake_figure().with_size(60, 40),
        uptake_figure().with_size(1, 1),
    ];
    // What is left out, and why (more than 250 decades on a log axis; magnitude > 1e300).
    let expected_out_of_range = [0, 1, 2, 0, 0];
    for (fig, expected) in figs.iter().zip(expected_out_of_range) {
        let out = to_svg(fig).unwrap_or_else(|e| panic!("{}: {e}", fig.title));
        assert_eq!(out.notes.out_of_range, expected, "{}", fig.title);
        svg_texts(&out.svg);
        let dir = tempfile::tempdir().expect("dir");
        to_png(fig, dir.path().join("x.png")).unwrap_or_else(|e| panic!("{}: {e}", fig.title));
    }
}

#[test]
fn nearly_equal_and_subnormal_values_render() {
    let fig = Figure::new("close", "x [m]", "y [m]")
        .with_series(Series::markers(
            "a",
            vec![1.0, 1.0 + 4.0 * f64::EPSILON],
            vec![1e-310, 2e-310],
        ))
        .with_series(Series::line("b", vec![1.0, 1.0], vec![1e-310, 1e-310]));
    for log_y in [false, true] {
        let out = to_svg(&fig.clone().with_log_y(log_y)).expect("renders");
        svg_texts(&out.svg);
    }
}

mod fuzz {
    use super::*;
    use proptest::prelude::*;

    /// Any f64 the user's data might hold, weighted towards the awkward ones.
    fn value() -> impl Strategy<Value = f64> {
        prop_oneof![
            4 => -1e6..1e6f64,
            1 => Just(0.0),
            1 => Just(f64::NAN),
            1 => Just(f64::INFINITY),
            1 => Just(f64::NEG_INFINITY),
            1 => prop::num::f64::ANY,
            1 => 1e-320..1e-300f64,
        ]
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]

        /// Whatever the data, rendering returns a well-formed SVG (common practice: odd data
        /// must never fail a report).
        #[test]
        fn any_data_renders(
            x in prop::collection::vec(value(), 0..12),
            y in prop::collection::vec(value(), 0..12),
            log_y in any::<bool>(),
            guide in value(),
        ) {
            let fig = Figure::new("fuzz", "x [m]", "y [m]")
                .with_log_y(log_y)
                .with_series(Series::markers("m", x.clone(), y.clone()))
                .with_series(Series::line("l", y, x))
                .with_guide(Guide::horizontal(guide, "g", Stroke::Dashed));
            let out = to_svg(&fig).expect("renders");
            svg_texts(&out.svg);
        }
    }
}

/// A seeded Gaussian series of `n` residuals (σ = 1) against time, one planted extreme.
fn long_residuals(n: usize, extreme_at: usize, extreme: f64) -> (Vec<f64>, Vec<f64>) {
    use rand::{rngs::StdRng, SeedableRng};
    use rand_distr::{Distribution, Normal};
    let mut rng = StdRng::seed_from_u64(2024);
    let normal = Normal::new(0.0, 1.0).expect("unit normal");
    let t: Vec<f64> = (0..n).map(|i| 0.1 * i as f64).collect();
    let mut r: Vec<f64> = (0..n).map(|_| normal.sample(&mut rng)).collect();
    r[extreme_at] = extreme;
    (t, r)
}

#[test]
fn a_million_residuals_are_thinned_for_drawing_and_keep_their_extremes() {
    let n = 1_000_000;
    let (t, r) = long_residuals(n, 654_321, -9.5);
    let (series, before) = thinned_markers("residuals", &t, &r);
    assert_eq!(before, Some(n));
    assert!(series.x.len() <= 2 * DRAW_BINS, "{} drawn", series.x.len());
    // The extreme residual and the largest one are among the drawn points, at their times.
    let max_at = (0..n)
        .max_by(|&a, &b| r[a].total_cmp(&r[b]))
        .expect("points");
    for i in [654_321, max_at] {
        assert!(
            series
                .x
                .iter()
                .zip(&series.y)
                .any(|(&x, &y)| x == t[i] && y == r[i]),
            "point {i} ({}, {}) not drawn",
            t[i],
            r[i]
        );
    }
    let mut fig = residual_figure("Residuals", "time [s]", "residual [mg]", vec![series]);
    fig.notes
        .push(thinned_note(fig.series[0].x.len(), n, "bin extremes"));
    let out = to_svg(&fig).expect("renders");
    assert!(out.svg.len() < 1_000_000, "SVG of {} bytes", out.svg.len());
    assert_eq!(out.notes.out_of_range + out.notes.non_finite, 0);
    assert!(out.svg.contains("of 1 000 000 points shown: bin extremes"));
    check_png(&fig);

    // The normal Q–Q plot of the same residuals: both tails in full, a small file.
    let start = Instant::now();
    let fig = qq_figure(&r);
    let markers = fig.series.last().expect("markers");
    assert!(markers.x.len() <= QQ_SPACED + 2 * QQ_TAIL);
    let mut sorted = r.clone();
    sorted.sort_by(f64::total_cmp);
    assert_eq!(markers.y[..QQ_TAIL], sorted[..QQ_TAIL]);
    assert_eq!(
        markers.y[markers.y.len() - QQ_TAIL..],
        sorted[n - QQ_TAIL..]
    );
    assert_eq!(markers.label, "residuals (n = 1000000)");
    // The plotting positions are those of the whole sample: the smallest is Φ⁻¹(0.625 /
    // (n + 0.25)) (Blom 1958), −4.9 for n = 10⁶ (common practice: Φ⁻¹(6.25e-7) ≈ −4.85).
    assert!((markers.x[0] + 4.85).abs() < 0.02, "{}", markers.x[0]);
    let out = to_svg(&fig).expect("renders");
    assert!(out.svg.len() < 1_000_000, "SVG of {} bytes", out.svg.len());
    assert!(out.svg.contains("of 1 000 000 points shown"));
    eprintln!(
        "Q-Q figure of 10^6 residuals built and drawn in {:?}",
        start.elapsed()
    );
}

#[test]
fn short_series_are_drawn_whole() {
    let (t, r) = long_residuals(DRAW_ALL_UP_TO, 10, 5.0);
    let (series, before) = thinned_markers("residuals", &t, &r);
    assert_eq!(before, None);
    assert_eq!((series.x, series.y), (t, r.clone()));
    let fig = qq_figure(&r);
    assert_eq!(fig.series.last().map(|s| s.x.len()), Some(DRAW_ALL_UP_TO));
    assert!(fig.notes.is_empty());
}
