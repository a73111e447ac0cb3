//! Failing physics: every file under `tests/cases/failing/` states in its
//! header what checking it must find, one `# expect:` line per statement
//! (or derivation step), asserted on the typed outcome, not on the report's
//! text; the text report is a snapshot beside it.
//!
//! Header lines:
//!
//! ```text
//! # expect: exit 1
//! # expect: line 12 not proved, remainder mentions b[
//! # expect: line 20 step 3 not proved, factor 2
//! # expect: line 15 not proved, failing x2
//! ```
//!
//! A line names a statement by its line (every configuration of a sampled
//! statement must match), optionally one step of a derivation, then a
//! status (`proved`, `proved away`, `confirmed`, `not proved`, `unknown`),
//! then details: `sign`, `factor R` (the ratio as printed), `contact at P`,
//! `flux differs around P`, `failing P` (a flux check's insertion),
//! `remainder mentions TEXT`, `uncovered TEXT` (a claim left unknown because
//! no rule covers a divergence; TEXT is part of the note).

use wardsmith::outcome::{FileOutcome, Finding, Slip, Statement, Status, StepNumeric};
use wardsmith::run::{check_path, Mode, Options};
use wardsmith::term::print::Style;

fn status(word: &str) -> Status {
    match word {
        "proved" => Status::Proved,
        "proved away" => Status::ProvedAway,
        "confirmed" => Status::Confirmed,
        "not proved" => Status::NotProved,
        "unknown" => Status::Unknown,
        other => panic!("unknown status `{other}` in an expect line"),
    }
}

/// Checks one detail against a statement (and the step, if named).
fn detail(s: &Statement, step: Option<usize>, d: &str, at: &str) {
    let step = step.map(|k| match &s.finding {
        Finding::Derivation(der) => der
            .steps
            .iter()
            .find(|st| st.step == k)
            .unwrap_or_else(|| panic!("{at}: no step {k}")),
        _ => panic!("{at}: not a derivation"),
    });
    if let Some(text) = d.strip_prefix("remainder mentions ") {
        let remainder = match (&s.finding, step) {
            (_, Some(st)) => st.remainder.as_ref().map(|r| r.print(Style::Unicode)),
            (Finding::Claim(c), None) => Some(c.check.remainder.print(Style::Unicode)),
            (Finding::Expect(e), None) => Some(e.check.remainder.print(Style::Unicode)),
            _ => None,
        }
        .unwrap_or_else(|| panic!("{at}: no remainder"));
        assert!(
            remainder.contains(text) && remainder != "0",
            "{at}: the remainder {remainder} does not mention {text}"
        );
    } else if let Some(text) = d.strip_prefix("uncovered ") {
        let stop = match &s.finding {
            Finding::Claim(c) => &c.check.search.stop,
            Finding::Expect(e) => &e.check.search.stop,
            _ => panic!("{at}: not a claim"),
        };
        assert!(
            matches!(stop, wardsmith::egraph::Stop::Uncovered(why) if why.contains(text)),
            "{at}: the search stopped with {stop:?}"
        );
    } else if let Some(point) = d.strip_prefix("failing ") {
        let Finding::Flux(f) = &s.finding else {
            panic!("{at}: not a flux check");
        };
        assert_eq!(f.failing_insertions, vec![point.to_string()], "{at}");
    } else if let Some(point) = d.strip_prefix("contact at ") {
        let slip = step.and_then(|st| st.slip.as_ref());
        assert!(
            matches!(slip, Some(Slip::Contact { at, .. }) if at == point),
            "{at}: the slip is {slip:?}"
        );
    } else if let Some(point) = d.strip_prefix("flux differs around ") {
        let found = step.and_then(|st| st.numeric.as_ref());
        assert!(
            matches!(found, Some(StepNumeric::FluxDiffers { around, .. }) if around == point),
            "{at}: the model found {found:?}"
        );
    } else if let Some(ratio) = d.strip_prefix("factor ") {
        let slip = step.and_then(|st| st.slip.as_ref());
        assert!(
            matches!(slip, Some(Slip::Factor { ratio: r }) if r.print(Style::Unicode) == ratio),
            "{at}: the slip is {slip:?}"
        );
    } else if d == "sign" {
        let slip = step.and_then(|st| st.slip.as_ref());
        assert!(
            matches!(slip, Some(Slip::Sign)),
            "{at}: the slip is {slip:?}"
        );
    } else {
        panic!("{at}: unknown detail `{d}`");
    }
}

/// Asserts every `# expect:` line of `text` on the outcome.
fn assert_expectations(text: &str, o: &FileOutcome, file: &str) {
    let mut seen = 0;
    for line in text.lines() {
        let Some(expect) = line.strip_prefix("# expect:") else {
            continue;
        };
        seen += 1;
        let at = format!("{file}: `{}`", expect.trim());
        let mut parts = expect.split(',').map(str::trim);
        let head = parts.next().unwrap_or("");
        if let Some(code) = head.strip_prefix("exit ") {
            assert_eq!(o.exit_code.to_string(), code, "{at}");
            continue;
        }
        let words: Vec<&str> = head.split_whitespace().collect();
        let (n, rest) = match words.as_slice() {
            ["line", n, rest @ ..] => (n.parse::<usize>().expect("a line number"), rest),
            _ => panic!("{at}: an expect line starts with `line N` or `exit N`"),
        };
        let (step, rest) = match rest {
            ["step", k, rest @ ..] => (Some(k.parse::<usize>().expect("a step number")), rest),
            rest => (None, rest),
        };
        let want = status(&rest.join(" "));
        let statements: Vec<&Statement> = o.statements.iter().filter(|s| s.line == n).collect();
        assert!(!statements.is_empty(), "{at}: no statement on line {n}");
        for s in statements {
            let got = match (step, &s.finding) {
                (Some(k), Finding::Derivation(d)) => {
                    d.steps.iter().find(|st| st.step == k).map(|st| st.status)
                }
                (Some(_), _) => panic!("{at}: not a derivation"),
                (None, _) => s.status,
            };
            assert_eq!(got, Some(want), "{at}");
            for d in parts.clone() {
                detail(s, step, d, &at);
            }
        }
    }
    assert!(seen > 0, "{file} states no expectation");
}

#[test]
fn failing_cases_fail_as_their_headers_say() {
    insta::glob!("cases/failing/*.ward", |path| {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
        let rel = path.strip_prefix(root).unwrap_or(path);
        let text = std::fs::read_to_string(path).expect("case file");
        let opts = Options::default();
        let o = check_path(rel, Mode::Check, &opts).unwrap_or_else(|e| panic!("{}", e.render()));
        assert_expectations(&text, &o, &rel.display().to_string());
        let report = wardsmith::report::text::render(&o, Style::Unicode);
        insta::with_settings!({ omit_expression => true }, {
            insta::assert_snapshot!(format!("{text}── check (exit code {}) ──\n{report}", o.exit_code));
        });
    });
}
