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

/// Checks a file given as text; the report and the exit code.
fn check(header: &str, body: &str) -> (String, i32) {
    let source = Source::new("test.ward", format!("{header}\n{body}\n"));
    let out = run_source(&source, Path::new("."), Mode::Check, &Options::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    (out.report, out.code)
}

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

const WALL_BLOCKS: &str = "dimension d
positive xi Delta Dhat
let fbulk(t) = f_bulk(Delta; t)
let fbdy(t) = f_bdy(Dhat; t)";

#[test]
fn casimir_equations_fail_for_a_wrong_eigenvalue_or_block() {
    // docs/conventions.md §9 (McAvity & Osborn 1995; Liendo, Rastelli &
    // van Rees 2012): the right equations hold, and each perturbation is
    // refuted with a remainder in ₂F₁ — not left unknown.
    let bulk = |eigenvalue: &str, f: &str| {
        format!(
            "claim 4 xi^2 (1 + xi) {f}''(xi) + 2 xi (2 xi + 2 - d) {f}'(xi) = {eigenvalue} {f}(xi)"
        )
    };
    let boundary = |eigenvalue: &str| {
        format!("claim xi (1 + xi) fbdy''(xi) + d/2 (2 xi + 1) fbdy'(xi) = {eigenvalue} fbdy(xi)")
    };
    let (report, code) = check(WALL_BLOCKS, &bulk("Delta (Delta - d)", "fbulk"));
    assert_eq!(code, 0, "{report}");
    let (report, code) = check(WALL_BLOCKS, &boundary("Dhat (Dhat - d + 1)"));
    assert_eq!(code, 0, "{report}");
    let wrong_parameter = "let w(t) = t^(Delta/2) F21(Delta/2, Delta/2 + 1; Delta + 1 - d/2; -t)";
    for (header, body) in [
        (
            WALL_BLOCKS.to_string(),
            bulk("Delta (Delta - d - 1)", "fbulk"),
        ),
        (
            WALL_BLOCKS.to_string(),
            bulk("(Delta - 1) (Delta - d)", "fbulk"),
        ),
        (WALL_BLOCKS.to_string(), boundary("Dhat (Dhat - d + 2)")),
        (WALL_BLOCKS.to_string(), boundary("Delta (Delta - d)")),
        (
            format!("{WALL_BLOCKS}\n{wrong_parameter}"),
            bulk("Delta (Delta - d)", "w"),
        ),
    ] {
        let (report, code) = check(&header, &body);
        assert_eq!(code, 1, "{report}");
        assert!(report.contains("NOT PROVED"), "{report}");
        assert!(report.contains("₂F₁"), "{report}");
        assert!(!report.contains("UNKNOWN"), "{report}");
    }
}

#[test]
fn relations_the_normal_form_does_not_decide_are_unknown() {
    // Gauss's contiguous relations (DLMF 15.5.11–15.5.18) and the
    // transformations of the argument (DLMF 15.8.1) hold, but the normal
    // form keeps one family apart from another: true identities between two
    // families are unknown, never proved. (A wrong one is refuted by the
    // value of its remainder at sampled parameters: below.)
    let header = "dimension d\nparameters a b c z";
    for claim in [
        // Pfaff (DLMF 15.8.1), true.
        "claim F21(a, b; c; z) = (1 - z)^(-a) F21(a, c - b; c; z/(z - 1))",
        // A contiguous relation in c (DLMF 15.5.18, from memory; checked
        // with mpmath at a = 0.3, b = 1.7, c = 2.9, z = -0.6), true:
        // c (c - 1)(z - 1) F(c - 1) + c (c - 1 - (2c - a - b - 1) z) F(c) + (c - a)(c - b) z F(c + 1) = 0.
        "claim c (c - 1) (z - 1) F21(a, b; c - 1; z) + c (c - 1 - (2 c - a - b - 1) z) F21(a, b; c; z) + (c - a) (c - b) z F21(a, b; c + 1; z) = 0",
        // Elementary parameters: ₂F₁(1, 1; 2; z) = -ln(1 - z)/z (DLMF 15.4.2)
        // satisfies z F' + F = 1/(1 - z), which the normal form cannot see.
        "claim z F21'(1, 1; 2; z) + F21(1, 1; 2; z) = 1/(1 - z)",
    ] {
        let (report, code) = check(header, claim);
        assert_eq!(code, 1, "{report}");
        assert!(report.contains("UNKNOWN"), "{report}");
        assert!(report.contains("the remainder is undecided"), "{report}");
    }
}

#[test]
fn wrong_relations_between_families_are_refuted_by_value() {
    // The contiguous relation above with a wrong sign, and two members of
    // different families set equal: false, and refuted because the whole
    // remainder, ₂F₁ included, is certainly not zero at a sampled point
    // (src/numeric/nonzero.rs, hypergeometric_nonzero).
    let header = "dimension d\nparameters a b c z";
    for claim in [
        "claim c (c - 1) (z - 1) F21(a, b; c - 1; z) - c (c - 1 - (2 c - a - b - 1) z) F21(a, b; c; z) + (c - a) (c - b) z F21(a, b; c + 1; z) = 0",
        "claim F21(a, a; 2 a + 1; z) = F21(a, a; 2 a; z)",
    ] {
        let (report, code) = check(header, claim);
        assert_eq!(code, 1, "{report}");
        assert!(report.contains("NOT PROVED"), "{report}");
        assert!(!report.contains("UNKNOWN"), "{report}");
    }
}

#[test]
fn coordinate_casimirs_fail_for_wrong_eigenvalues() {
    // tests/cases/integrated/casimir-coordinates.ward with the eigenvalue of
    // each block claim changed: refuted (the coefficients of ₂F₁ in the
    // remainder are shown nonzero at sampled points), not left unknown.
    let text = std::fs::read_to_string("tests/cases/integrated/casimir-coordinates.ward")
        .expect("the case exists");
    for (right, wrong) in [
        ("= Delta (Delta - d) HB", "= Delta (Delta - d + 1) HB"),
        ("= Dhat (Dhat - d + 1) HW", "= Dhat (Dhat - d) HW"),
    ] {
        assert!(text.contains(right));
        let source = Source::new("casimir.ward", text.replace(right, wrong));
        let out = run_source(&source, Path::new("."), Mode::Check, &Options::default())
            .unwrap_or_else(|e| panic!("{}", e.render()));
        assert_eq!(out.code, 1, "{}", out.report);
        assert_eq!(
            out.report.matches("NOT PROVED").count(),
            1,
            "{}",
            out.report
        );
        assert!(!out.report.contains("UNKNOWN"), "{}", out.report);
    }
}

#[test]
fn four_point_identities_fail_for_a_wrong_prefactor() {
    // tests/cases/integrated/four-point-global.ward (Dolan & Osborn 2001):
    // with the exponent of x12 off by one the dilatation and special
    // conformal identities fail; translations and rotations still hold.
    let text = std::fs::read_to_string("tests/cases/integrated/four-point-global.ward")
        .expect("the case exists");
    let right = "|x1 - x2|^(-Delta1 - Delta2)";
    assert!(text.contains(right));
    let source = Source::new(
        "four.ward",
        text.replace(right, "|x1 - x2|^(1 - Delta1 - Delta2)"),
    );
    let out = run_source(&source, Path::new("."), Mode::Check, &Options::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 1, "{}", out.report);
    assert_eq!(
        out.report.matches("NOT PROVED").count(),
        2,
        "{}",
        out.report
    );
    // The remainder is the unknown function times the broken weight.
    assert!(out.report.contains(" F(|x1 - x2|^2"), "{}", out.report);
}
