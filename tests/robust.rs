//! Inputs an adversarial user might write: nesting far past any derivation,
//! long sums, algebra that grows. Each must end in a result or an input
//! error with its place (exit code 2) — never a stack overflow, an exhausted
//! memory or a run without end. The limits are the budgets of
//! `wardsmith::budget`; these tests run through the library, on the
//! checker's own thread, whatever the test thread's stack.

use std::path::Path;

use wardsmith::budget::MAX_DEPTH;
use wardsmith::diagnostic::{Error, ErrorKind, Source};
use wardsmith::run::{run_source, Mode, Options, Outcome};

const HEAD: &str = "dimension 4\nhalfspace y >= 0\nparameters a u\nfunction F\n\
                    scalar O dim 1\npoints x1 x2\n";

fn run(body: &str) -> Result<Outcome, Error> {
    let text = format!("{HEAD}{body}\n");
    run_source(
        &Source::new("deep.ward", text),
        Path::new("."),
        Mode::Check,
        &Options::default(),
    )
}

/// The run is refused as nested too deeply, at `line:col`.
fn assert_too_deep(body: &str, at: (usize, usize)) {
    let e = run(body).expect_err("refused");
    assert_eq!(e.kind, ErrorKind::Limit, "{}", e.render());
    assert_eq!(e.message, format!("nested too deeply (limit {MAX_DEPTH})"));
    let (source, span) = e.at.as_ref().expect("the error has a place");
    assert_eq!(source.line_col(span.start), at, "{}", e.render());
}

#[test]
fn brackets_past_the_limit_are_refused_at_the_first_level_too_many() {
    // `simplify a + (((…` on line 7: the bracket opening level 1001 is
    // character 13 + 1000.
    for n in [MAX_DEPTH + 1, 2_500, 100_000] {
        let body = format!("simplify a + {}a{}", "(".repeat(n), ")".repeat(n));
        assert_too_deep(&body, (7, 13 + MAX_DEPTH + 1));
    }
    // Unclosed brackets are refused for their depth, not as a syntax error.
    assert_too_deep(
        &format!("simplify {}", "(".repeat(100_000)),
        (7, 10 + MAX_DEPTH),
    );
}

#[test]
fn nesting_up_to_the_limit_is_checked() {
    let n = MAX_DEPTH;
    for body in [
        format!("simplify {}a{}", "(".repeat(n), ")".repeat(n)),
        format!("claim {}a{} = a", "(".repeat(n), ")".repeat(n)),
        format!("simplify {}a{}", "(a + ".repeat(n - 1), ")".repeat(n - 1)),
        format!("simplify {}a", "- ".repeat(n)),
        format!("simplify {}<O(x1) O(x2)>", "∂[n](x1) ".repeat(n)),
    ] {
        let out = run(&body).unwrap_or_else(|e| panic!("{}", e.render()));
        assert_eq!(out.code, 0, "{}", out.report);
    }
}

#[test]
fn calls_derivatives_signs_and_powers_past_the_limit_are_refused() {
    // Each body starts at column 10 of line 7, after `simplify `; for calls
    // the bracket of call 1001 is the one too many.
    assert_too_deep(
        &format!("simplify {}u{}", "F(".repeat(1_700), ")".repeat(1_700)),
        (7, 11 + 2 * MAX_DEPTH),
    );
    assert_too_deep(
        &format!("simplify {}<O(x1) O(x2)>", "∂[n](x1) ".repeat(3_900)),
        (7, 10 + 9 * MAX_DEPTH),
    );
    assert_too_deep(
        &format!("simplify {}a", "- ".repeat(100_000)),
        (7, 10 + 2 * MAX_DEPTH),
    );
    assert_too_deep(
        &format!("simplify {}a", "a^".repeat(100_000)),
        (7, 11 + 2 * MAX_DEPTH),
    );
}

#[test]
fn long_flat_sums_and_products_are_not_deep() {
    let sum = vec!["a"; 6_500].join(" + ");
    let out = run(&format!("claim {sum} = 6500 a")).unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 0, "{}", out.report);
    let product = vec!["a"; 6_500].join(" ");
    let out =
        run(&format!("claim {product} = a^6500")).unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 0, "{}", out.report);
}

#[test]
fn named_expressions_count_where_they_are_used() {
    // Three named expressions of 400 calls each: 1200 once substituted.
    let calls = |inner: &str| format!("{}{inner}{}", "F(".repeat(400), ")".repeat(400));
    let body = format!(
        "let A = {}\nlet B = {}\nlet C = {}\nsimplify C",
        calls("u"),
        calls("A"),
        calls("B")
    );
    let e = run(&body).expect_err("refused");
    assert_eq!(e.kind, ErrorKind::Limit, "{}", e.render());
    // Reported where `B` is used inside `C`, on line 9.
    let (source, span) = e.at.as_ref().expect("placed");
    assert_eq!(source.line_col(span.start), (9, 9 + 800));
}

#[test]
fn exact_numbers_stay_within_their_budget() {
    // A power whose value would take 13.6 million bits is kept as a power.
    let out = run("simplify (10^4096)^1024").unwrap_or_else(|e| panic!("{}", e.render()));
    let simplify = Options {
        style: wardsmith::term::print::Style::Ascii,
        ..Options::default()
    };
    let shown = run_source(
        &Source::new("power.ward", format!("{HEAD}simplify (10^4096)^1024\n")),
        Path::new("."),
        Mode::Simplify,
        &simplify,
    )
    .unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 0);
    assert!(
        shown
            .report
            .contains(&format!("1{}^1024", "0".repeat(4096))),
        "{}",
        shown.report
    );
    // A literal of a million digits is refused before it is read.
    let e = run(&format!("simplify {}", "7".repeat(1_000_000))).expect_err("refused");
    assert_eq!(e.kind, ErrorKind::Limit);
    assert_eq!(
        e.message,
        format!(
            "number too long: 1000000 digits (limit {})",
            wardsmith::budget::MAX_DIGITS
        )
    );
}
