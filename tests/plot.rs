//! The figures of `scan … into` and `decompose … into` (src/plot.rs): well
//! formed SVG whose words — title, legend, axis labels, tick labels — are
//! the ones expected, for ordinary and for awkward data, with no font
//! looked up. Positions are plotters' business and are not snapshotted.

use std::path::PathBuf;

use wardsmith::diagnostic::Source;
use wardsmith::numeric::agreement::Agreement;
use wardsmith::numeric::session::Scan;
use wardsmith::plot::{fit_title, svg, Labels};
use wardsmith::run::{run_source, Mode, Options};

/// The `<text>` elements of a well-formed SVG document, in order, each
/// with its whitespace collapsed. Panics when the document is not XML or
/// not an `svg` element.
fn texts(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap_or_else(|e| panic!("not XML: {e}\n{svg}"));
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(
        root.tag_name().namespace(),
        Some("http://www.w3.org/2000/svg")
    );
    root.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| {
            n.text()
                .unwrap_or("")
                .split_whitespace()
                .collect::<Vec<_>>()
                .join(" ")
        })
        .collect()
}

fn labels() -> Labels {
    Labels {
        title: "scan Delta from 1 to 2 steps 5: <O(x1) O(x2)> = |x1 - x2|^(-2 Delta)".into(),
        x: "Delta (scaling dimension of O)".into(),
        y: "value of each side".into(),
        left: "left side".into(),
        right: "right side".into(),
    }
}

/// Rows at x = 1, 1.25, …, 2 with the given sides, judged as the report
/// would be.
fn scan(left: &[f64], right: &[f64], verdicts: &[Agreement]) -> Scan {
    let rows = (0..left.len())
        .map(|i| (1.0 + 0.25 * i as f64, vec![left[i]], vec![right[i]]))
        .collect();
    let judged = (0..left.len())
        .map(|i| {
            let size = left[i].abs().max(right[i].abs()).max(f64::MIN_POSITIVE);
            vec![((left[i] - right[i]).abs() / size, verdicts[i].clone())]
        })
        .collect();
    Scan {
        param: "Delta".into(),
        labels: vec![String::new()],
        rows,
        judged,
        errors: Vec::new(),
    }
}

#[test]
fn a_scan_plot_has_its_title_legend_axis_labels_and_ticks() {
    let left = [1.0, 0.8, 0.6, 0.4, 0.2];
    let right = [1.0, 0.8, 0.6, 0.4 + 4e-9, 0.2];
    let verdicts = [
        Agreement::Agree,
        Agreement::Agree,
        Agreement::Agree,
        Agreement::Disagree,
        Agreement::Agree,
    ];
    let svg = svg(&scan(&left, &right, &verdicts), &labels()).expect("drawn");
    let texts = texts(&svg);
    // The words in the order they are drawn; the numbers of the ticks are
    // those of ticks at 0.2 steps from the data's range.
    insta::assert_snapshot!(texts.join("\n"));
    for word in [
        "left side",
        "right side",
        "Delta (scaling dimension of O)",
        "value of each side",
        "relative difference",
        "sides DISAGREE",
        "difference below 1e-17",
        "1.0",
        "2.0",
        "1e-8",
    ] {
        assert!(texts.iter().any(|t| t == word), "no `{word}` in {texts:?}");
    }
    assert!(texts[0].starts_with("scan Delta from 1 to 2"), "{texts:?}");
}

#[test]
fn titles_fit_the_width_on_one_line_or_two() {
    let width = 796.0;
    let estimate = |line: &str, size: f64| line.chars().count() as f64 * 0.6 * size / 1.24;
    let (size, lines) = fit_title("scan Delta from 1 to 2 steps 3: <O(x1) O(x2)> = 1", width);
    assert_eq!(lines.len(), 1);
    assert_eq!(size, 20.0);

    let long = "scan Delta from 1/2 to 5/2 steps 9: ∮[x on ball(x1, 1/4)] { N[mu] dil[nu](x) \
                <T[mu,nu](x) O(x1) O(x2)> } = - lambda x1[mu] ∂[mu](x1) <O(x1) O(x2)> - Delta \
                lambda <O(x1) O(x2)>";
    let (size, lines) = fit_title(long, width);
    assert_eq!(lines.len(), 2, "{lines:?}");
    assert!(
        lines.iter().all(|l| estimate(l, size) <= width),
        "{lines:?}"
    );
    assert_eq!(
        lines.join(" "),
        long.split_whitespace().collect::<Vec<_>>().join(" ")
    );

    let longer = long.repeat(3);
    let (size, lines) = fit_title(&longer, width);
    assert_eq!(lines.len(), 2);
    assert!(
        lines.iter().all(|l| estimate(l, size) <= width),
        "{lines:?}"
    );
    assert!(lines[1].ends_with('…'), "{lines:?}");

    // Whitespace of a statement written over several lines collapses.
    let (_, lines) = fit_title(
        "scan Delta from 1 to 2 steps 3:\n      <O(x1) O(x2)> = 1",
        width,
    );
    assert_eq!(lines, ["scan Delta from 1 to 2 steps 3: <O(x1) O(x2)> = 1"]);
}

#[test]
fn awkward_data_still_draws_a_well_formed_plot() {
    let unknown = || Agreement::Unknown("the left side overflowed".into());
    let cases: Vec<(&str, Scan)> = vec![
        ("no rows", scan(&[], &[], &[])),
        (
            "not finite",
            scan(
                &[f64::NAN, 1.0, f64::INFINITY, 2.0, f64::NEG_INFINITY],
                &[1.0, 1.0, 2.0, 2.0, f64::NAN],
                &[
                    unknown(),
                    Agreement::Agree,
                    unknown(),
                    Agreement::Agree,
                    unknown(),
                ],
            ),
        ),
        (
            "constant",
            scan(&[3.0; 5], &[3.0; 5], &vec![Agreement::Agree; 5]),
        ),
        ("zero", scan(&[0.0; 5], &[0.0; 5], &vec![unknown(); 5])),
        (
            "huge and tiny",
            scan(
                &[1e-300, 1e300, f64::MAX, f64::MIN_POSITIVE, 5e-324],
                &[-1e300, 1e-300, -f64::MAX, 1.0, 0.0],
                &vec![Agreement::Disagree; 5],
            ),
        ),
    ];
    for (what, mut scan) in cases {
        let svg = svg(&scan, &labels()).unwrap_or_else(|e| panic!("{what}: {e}"));
        let words = texts(&svg);
        assert!(words.iter().any(|t| t == "left side"), "{what}: {words:?}");
        // The same rows at a single value of the parameter.
        for row in &mut scan.rows {
            row.0 = 1.5;
        }
        let svg = self::svg(&scan, &labels()).unwrap_or_else(|e| panic!("{what}, one x: {e}"));
        texts(&svg);
    }
}

#[test]
fn components_each_have_their_two_sides_in_the_legend() {
    let mut s = scan(
        &[1.0, 2.0, 3.0],
        &[1.0, 2.0, 3.0],
        &vec![Agreement::Agree; 3],
    );
    s.labels = (0..8).map(|i| format!("mu={i}")).collect();
    for row in &mut s.rows {
        row.1 = (0..8).map(|i| row.0 * f64::from(i)).collect();
        row.2 = row.1.clone();
    }
    s.judged = s
        .rows
        .iter()
        .map(|_| vec![(0.0, Agreement::Agree); 8])
        .collect();
    let texts = texts(&svg(&s, &labels()).expect("drawn"));
    // Six components drawn; the legend says which.
    assert!(texts.iter().any(|t| t == "left side, mu=5"), "{texts:?}");
    assert!(texts.iter().any(|t| t == "right side, mu=5"), "{texts:?}");
    assert!(!texts.iter().any(|t| t.contains("mu=6")), "{texts:?}");
    assert!(
        texts
            .iter()
            .any(|t| t == "components 1-6 of 8 shown (all in the CSV)"),
        "{texts:?}"
    );
}

#[test]
fn values_over_many_decades_get_a_logarithmic_axis() {
    let values: Vec<f64> = (0..5).map(|i| 10f64.powi(4 * i)).collect();
    let s = scan(&values, &values, &vec![Agreement::Agree; 5]);
    let texts = texts(&svg(&s, &labels()).expect("drawn"));
    assert!(
        texts
            .iter()
            .any(|t| t == "value of each side (logarithmic)"),
        "{texts:?}"
    );
    for tick in ["1", "1e8", "1e16"] {
        assert!(
            texts.iter().any(|t| t == tick),
            "no tick {tick} in {texts:?}"
        );
    }
}

#[test]
fn samples_spaced_evenly_in_their_logarithm_get_a_logarithmic_axis() {
    // As `decompose` samples ξ: from 4 to 400, evenly in log ξ.
    let mut s = scan(&[1.0; 9], &[1.0; 9], &vec![Agreement::Agree; 9]);
    for (i, row) in s.rows.iter_mut().enumerate() {
        row.0 = 4.0 * 10f64.powf(i as f64 / 4.0);
    }
    let texts = texts(&svg(&s, &Labels::decompose("decompose")).expect("drawn"));
    for tick in ["5", "10", "20", "50", "100", "200"] {
        assert!(
            texts.iter().any(|t| t == tick),
            "no tick {tick} in {texts:?}"
        );
    }
    for word in [
        "cross-ratio ξ",
        "G(ξ)",
        "G(ξ) of the model",
        "expansion in blocks",
    ] {
        assert!(texts.iter().any(|t| t == word), "no `{word}` in {texts:?}");
    }
}

/// plotters draws SVG text without any font only while its `ttf` feature
/// (font-kit, which reads the system's fonts through fontconfig) is off:
/// with it, laying out a label fails on a machine without fonts. Nothing in
/// the build may turn it on.
#[test]
fn no_font_library_is_built() {
    let lock = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/Cargo.lock"))
        .expect("Cargo.lock");
    for font in [
        "font-kit",
        "ttf-parser",
        "ab_glyph",
        "fontconfig",
        "freetype",
    ] {
        assert!(
            !lock.contains(&format!("name = \"{font}")),
            "`{font}` is in Cargo.lock: plots would look up fonts"
        );
    }
}

#[test]
fn a_decomposition_writes_its_plot_through_the_same_figure() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("decompose-plot");
    std::fs::create_dir_all(&dir).expect("scratch dir");
    let text = "dimension 4
halfspace y >= 0
scalar P dim d/2 - 1
points x1 x2
model free-scalar neumann with P = phi
decompose <P(x1) P(x2)> in bulk blocks d - 2 into \"bulk\"
";
    let source = Source::new("blocks.ward", text);
    let out = run_source(&source, &dir, Mode::Check, &Options::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 0, "{}", out.report);
    let svg = std::fs::read_to_string(dir.join("bulk.svg")).expect("svg written");
    let texts = texts(&svg);
    assert_eq!(
        texts[0], "decompose <P(x1) P(x2)> in bulk blocks d - 2",
        "{texts:?}"
    );
    for word in [
        "cross-ratio ξ",
        "G(ξ)",
        "G(ξ) of the model",
        "expansion in blocks",
        "relative difference",
        "sides agree",
    ] {
        assert!(texts.iter().any(|t| t == word), "no `{word}` in {texts:?}");
    }
    let csv = std::fs::read_to_string(dir.join("bulk.csv")).expect("csv written");
    assert!(csv.starts_with("xi,left,right\n"), "{csv}");
}
