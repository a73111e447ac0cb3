//! Models and rules that grow: Wick expansions with many pairings and user
//! rules with many insertion patterns stop at their budgets
//! (`wardsmith::budget::MAX_WICK`, `Limits::matches`) with the reason
//! reported — an input error at the statement, or an unknown verdict —
//! instead of building every pairing or match first and exhausting the
//! memory. The assertions are on the reported stop reason, never on time.

use std::path::{Path, PathBuf};

use wardsmith::budget::MAX_WICK;
use wardsmith::diagnostic::{Error, ErrorKind, Source};
use wardsmith::egraph::Limits;
use wardsmith::run::{run_path, run_source, Mode, Options};

fn check(text: &str) -> Result<wardsmith::run::Outcome, Error> {
    run_source(
        &Source::new("growth.ward", text),
        Path::new("."),
        Mode::Check,
        &Options::default(),
    )
}

/// `n` points `x1 … xn` placed at distinct invented positions in d = 3,
/// above the wall when `wall`.
fn points(n: usize, wall: bool) -> String {
    let mut out = format!(
        "points {}\n",
        (1..=n)
            .map(|i| format!("x{i}"))
            .collect::<Vec<_>>()
            .join(" ")
    );
    for i in 1..=n {
        let y = if wall { i + 1 } else { i % 5 };
        out.push_str(&format!("place x{i} at ({i}, {}/3, {y})\n", i * i % 7));
    }
    out
}

fn correlator(op: &str, n: usize) -> String {
    let ops: Vec<String> = (1..=n).map(|i| format!("{op}(x{i})")).collect();
    format!("<{}>", ops.join(" "))
}

/// The error is the Wick limit, at line `line` of the file.
fn assert_wick_limit(e: &Error, line: usize) {
    assert_eq!(e.kind, ErrorKind::Limit, "{}", e.render());
    assert_eq!(
        e.message,
        format!("Wick contraction limit reached (limit {MAX_WICK}: pairs tried and terms built)")
    );
    let (source, span) = e.at.as_ref().expect("the error has a place");
    assert_eq!(source.line_col(span.start).0, line, "{}", e.render());
}

#[test]
fn sixteen_generalised_free_fields_stop_at_the_wick_limit() {
    // 15!! = 2,027,025 pairings, each a product of eight propagators with
    // their images: built up front, they exhausted 4 GB.
    let text = format!(
        "dimension 3\nhalfspace y >= 0\nscalar O dim Delta, norm 1\n{}model gff dirichlet\n\
         values Delta = 0.77\nevaluate {}\n",
        points(16, true),
        correlator("O", 16)
    );
    let e = check(&text).expect_err("refused");
    assert_wick_limit(&e, 3 + 1 + 16 + 2 + 1);
}

#[test]
fn eight_free_scalar_composites_stop_at_the_wick_limit() {
    // Eight :φ²: insertions: sixteen fields, 15!! matchings (the ones with a
    // self-contraction dropped); eight stress tensors the same with 4⁸
    // choices of terms.
    let text = format!(
        "dimension 3\nscalar P dim d - 2\n{}model free-scalar with P = phi2\nevaluate {}\n",
        points(8, false),
        correlator("P", 8)
    );
    let e = check(&text).expect_err("refused");
    assert_wick_limit(&e, 2 + 1 + 8 + 1 + 1);
}

#[test]
fn a_wick_expansion_within_the_limit_is_still_summed() {
    // Six insertions of one generalised free field: 15 pairings. The
    // four-point function is the classic three-term sum (common practice).
    let text = format!(
        "dimension 3\nscalar O dim Delta, norm 1\n{}model gff\nvalues Delta = 0.77\n\
         compare {} = |x1 - x2|^(-2 Delta) |x3 - x4|^(-2 Delta) \
         + |x1 - x3|^(-2 Delta) |x2 - x4|^(-2 Delta) + |x1 - x4|^(-2 Delta) |x2 - x3|^(-2 Delta)\n",
        points(4, false),
        correlator("O", 4)
    );
    let out = check(&text).unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 0, "{}", out.report);
}

/// A fresh folder for rule files.
fn folder(name: &str) -> PathBuf {
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_nanos())
        .unwrap_or(0);
    let dir = std::env::temp_dir().join(format!("wardsmith-{name}-{}-{nanos}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("create a temporary folder");
    dir
}

const SIX_PATTERNS: &str = "ruleset six

rule six-any
    when ?rest scalar
    from <?a(?p1) ?b(?p2) ?c(?p3) ?e(?p4) ?f(?p5) ?g(?p6) ...?rest>
    to   <?a(?p1) ?b(?p2) ?c(?p3) ?e(?p4) ?f(?p5) ?g(?p6) ...?rest>
";

#[test]
fn a_rule_with_six_insertion_patterns_stops_at_the_match_limit() {
    // Six patterns on forty insertions match 40·39·…·35 ≈ 2.8·10⁹ ways; they
    // were all enumerated before the e-node limit was looked at.
    let dir = folder("six-patterns");
    std::fs::write(dir.join("six.rules"), SIX_PATTERNS).expect("write the rules");
    let n = 40;
    let names: Vec<String> = (1..=n).map(|i| format!("x{i}")).collect();
    let text = format!(
        "dimension 4\nscalar O dim Delta\npoints {}\nrules \"six.rules\"\nclaim {} = 0\n",
        names.join(" "),
        correlator("O", n)
    );
    let path = dir.join("six.ward");
    std::fs::write(&path, text).expect("write the file");
    let options = Options {
        limits: Limits {
            matches: 5_000,
            ..Limits::default()
        },
        ..Options::default()
    };
    let out = run_path(&path, Mode::Check, &options).unwrap_or_else(|e| panic!("{}", e.render()));
    let _ = std::fs::remove_dir_all(&dir);
    assert_eq!(out.code, 1, "{}", out.report);
    assert!(out.report.contains("UNKNOWN"), "{}", out.report);
    assert!(
        out.report
            .contains("stopped: rule matching reached its limit (limit 5000 steps)"),
        "{}",
        out.report
    );
}

#[test]
fn the_match_limit_leaves_the_shipped_rules_room() {
    // The divergence identity with 32 insertions, half on the wall, takes a
    // few thousand matching steps; a limit of 50,000 is far above it.
    let bulk: Vec<String> = (1..=16).map(|i| format!("x{i}")).collect();
    let wall: Vec<String> = (1..=16).map(|i| format!("s{i}")).collect();
    let inserts: Vec<String> = bulk
        .iter()
        .map(|p| format!("O({p})"))
        .chain(wall.iter().map(|p| format!("psi({p})")))
        .collect();
    let text = format!(
        "dimension d\nhalfspace y >= 0\nscalar O dim Delta\nboundary scalar psi dim 3\n\
         points x {}\nboundary points {}\nsimplify ∂[mu](x) <T[mu,nu](x) {}>\n",
        bulk.join(" "),
        wall.join(" "),
        inserts.join(" ")
    );
    let options = Options {
        limits: Limits {
            matches: 50_000,
            ..Limits::default()
        },
        ..Options::default()
    };
    let out = run_source(
        &Source::new("divergence.ward", text),
        Path::new("."),
        Mode::Simplify,
        &options,
    )
    .unwrap_or_else(|e| panic!("{}", e.render()));
    assert!(out.report.contains("[saturated;"), "{}", out.report);
}

#[test]
fn a_claim_past_the_term_budget_is_unknown_with_its_reason() {
    // (36 monomials)^12 in coordinates: billions of monomials, refused at
    // the normaliser's budget of terms; a claim, so unknown (exit 1), not
    // an input error, and the next statement is still checked.
    use wardsmith::budget::MAX_TERMS;
    use wardsmith::egraph::Stop;
    use wardsmith::outcome::{Finding, Status};
    let text = "dimension 6\npoints x1 x2 x3 x4 x5 x6\n\
        let S = |x1 - x2|^2 + |x3 - x4|^2 + |x5 - x6|^2\n\
        claim S^12 = S^12 + 1\nclaim S^2 - S S = 0\n";
    let out = check(text).unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 1, "{}", out.report);
    let statements = &out.checked.as_ref().expect("an outcome").statements;
    let Finding::Claim(first) = &statements[0].finding else {
        panic!("not a claim: {:?}", statements[0].finding)
    };
    assert_eq!(first.check.status, Status::Unknown);
    assert_eq!(first.check.search.stop, Stop::TermLimit(MAX_TERMS));
    assert!(
        out.report.contains(&format!(
            "stop reason: the normaliser stopped at its term budget ({MAX_TERMS} monomials)"
        )),
        "{}",
        out.report
    );
    let Finding::Claim(second) = &statements[1].finding else {
        panic!("not a claim")
    };
    assert_eq!(second.check.status, Status::Proved, "{}", out.report);
}
