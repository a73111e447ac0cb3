//! Integrated Ward identities: regions, conformal Killing vectors, broken
//! generators and symbolic calculus, end to end from `.ward` text.
//!
//! Every file under `tests/cases/integrated/` must check clean (each claim
//! and `expect` there is a published identity typed out by hand, with its
//! source in the file), and its simplified output is snapshot-tested. The
//! same checks with the physics wrong are case files under
//! `tests/cases/failing/` (tests/failing.rs), so the clean runs are not
//! vacuous.

use std::path::{Path, PathBuf};

use wardsmith::diagnostic::Source;
use wardsmith::outcome::Finding;
use wardsmith::run::{run_path, run_source, Mode, Options};

fn relative(path: &Path) -> PathBuf {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    path.strip_prefix(root).unwrap_or(path).to_path_buf()
}

#[test]
fn integrated_cases_check_clean() {
    insta::glob!("cases/integrated/*.ward", |path| {
        let rel = relative(path);
        let check = run_path(&rel, Mode::Check, &Options::default())
            .unwrap_or_else(|e| panic!("{}", e.render()));
        assert_eq!(check.code, 0, "{}:\n{}", rel.display(), check.report);
        assert!(!check.report.contains("NOT PROVED") && !check.report.contains("UNKNOWN"));
        let simplified = run_path(&rel, Mode::Simplify, &Options::default())
            .unwrap_or_else(|e| panic!("{}", e.render()));
        insta::assert_snapshot!(simplified.report);
    });
}

#[test]
fn generators_are_classified_preserved_or_broken() {
    // Common practice (docs/conventions.md §7): ε_n = 0 on y = 0 is preserved.
    let text = "dimension d\nhalfspace y >= 0\npoints x\n\
        killing a1 translation e parallel\nkilling a2 translation n\n\
        killing a3 rotation omega parallel\nkilling a4 rotation n f\n\
        killing a5 dilatation lambda\nkilling a6 special b parallel\nkilling a7 special n\n\
        classify a1\nclassify a2\nclassify a3\nclassify a4\nclassify a5\nclassify a6\nclassify a7\n";
    let source = Source::new("classify.ward", text);
    let out =
        run_source(&source, Path::new("."), Mode::Simplify, &Options::default()).expect("runs");
    let checked = out.checked.expect("an outcome");
    let verdicts: Vec<bool> = checked
        .statements
        .iter()
        .map(|s| match &s.finding {
            Finding::Classify(c) => c.preserved,
            other => panic!("not a classification: {other:?}"),
        })
        .collect();
    assert_eq!(
        verdicts,
        [true, false, true, false, true, true, false],
        "{}",
        out.report
    );
}

#[test]
fn a_delta_on_the_surface_or_in_an_unknown_place_is_an_error() {
    let header =
        "dimension 3\nscalar O dim Delta\nparameters r\npoints x x1 x2 x3\nplace x2 on ball(x1, r)";
    for (body, message) in [
        (
            "simplify ∫[x in ball(x1, r)] { δ(x - x2) <O(x2)> }",
            "lies on the surface",
        ),
        (
            "simplify ∫[x in ball(x1, r)] { δ(x - x3) <O(x3)> }",
            "place x3 inside ball(x1, r)",
        ),
    ] {
        let source = Source::new("regions.ward", format!("{header}\n{body}\n"));
        let err = run_source(&source, Path::new("."), Mode::Simplify, &Options::default())
            .expect_err("must be rejected");
        let rendered = err.render();
        assert!(rendered.contains(message), "{rendered}");
        assert!(rendered.contains("regions.ward:6:1"), "{rendered}");
    }
}
