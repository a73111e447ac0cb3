//! Printed output parses back to the same expression: every normal form
//! the shipped examples produce, printed in both styles and read again
//! after the file's own declarations, normalises to the same term.

use std::sync::Arc;

use wardsmith::diagnostic::Source;
use wardsmith::egraph::Limits;
use wardsmith::engine::Engine;
use wardsmith::lower::{lower, ItemKind, Program};
use wardsmith::normal::normalize;
use wardsmith::rules::RuleBook;
use wardsmith::syntax::parse_file;
use wardsmith::term::print::{Printer, Style};
use wardsmith::term::Term;

fn program(text: &str) -> Program {
    let source = Source::new("roundtrip.ward", text);
    lower(&source, &parse_file(&source).expect("parses")).expect("lowers")
}

/// The expression of the last `simplify` statement.
fn last_expr(p: &Program) -> Term {
    match &p.items.last().expect("an item").kind {
        ItemKind::Simplify { expr, .. } => expr.clone(),
        _ => panic!("expected a simplify statement"),
    }
}

fn check_file(path: &str) {
    let text = std::fs::read_to_string(path).expect("example exists");
    // Files that load their own rules are covered by the shipped rules
    // plus that file: strip the statement and load it here.
    let mut book = RuleBook::shipped().expect("shipped rules");
    if text.contains("rules \"u1-current.rules\"") {
        let rules = std::fs::read_to_string("examples/u1-current.rules").expect("rule file");
        book.load(&Source::new("u1-current.rules", rules))
            .expect("loads");
    }
    let text = text.replace("rules \"u1-current.rules\"", "");
    let p = program(&text);
    let engine = Engine::new(p.ctx.clone(), Arc::new(book), Limits::default()).expect("engine");
    let mut checked = 0;
    for item in &p.items {
        let exprs: Vec<&Term> = match &item.kind {
            ItemKind::Simplify { expr, expect } => std::iter::once(expr).chain(expect).collect(),
            ItemKind::Claim { lhs, rhs } => vec![lhs, rhs],
            ItemKind::Classify { .. } => vec![],
        };
        for expr in exprs {
            let simplified = engine.simplify(expr).expect("simplifies").term;
            for style in [Style::Unicode, Style::Ascii] {
                let printed = Printer::new(&p.ctx, style).term(&simplified);
                let again = program(&format!("{text}\nsimplify {printed}\n"));
                let reread = normalize(&again.ctx, &last_expr(&again)).expect("normalises");
                assert_eq!(reread, simplified, "{path}: `{printed}` did not read back");
                checked += 1;
            }
        }
    }
    assert!(checked > 0, "{path} has no statements");
}

#[test]
fn bulk_example_round_trips() {
    check_file("examples/bulk-ward.ward");
}

#[test]
fn wall_example_round_trips() {
    check_file("examples/wall-displacement.ward");
}

#[test]
fn current_example_round_trips() {
    check_file("examples/charged-current.ward");
}

#[test]
fn coefficients_and_powers_round_trip() {
    let text = "dimension d\nscalar O dim Delta\nparameters g\npoints x x1 x2\n\
                simplify (d - 1)/(d + 2) g^2 <O(x1) O(x2)> - 3/7 g^(1/2) δ(x - x1) <O(x1) O(x2)>\n";
    let p = program(text);
    let t = normalize(&p.ctx, &last_expr(&p)).expect("normalises");
    for style in [Style::Unicode, Style::Ascii] {
        let printed = Printer::new(&p.ctx, style).term(&t);
        let again = program(&format!("{text}simplify {printed}\n"));
        assert_eq!(
            normalize(&again.ctx, &last_expr(&again)).expect("normalises"),
            t,
            "{printed}"
        );
    }
}
