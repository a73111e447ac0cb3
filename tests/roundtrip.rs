//! Printed output parses back to the same expression: every normal form
//! the shipped examples and the integrated cases produce, and a list of
//! hand-written expressions with explicit functions and integrals, printed
//! in both styles and read again after the file's own declarations,
//! normalises to the same term.

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

/// Prints `simplified` in both styles, reads each form back after `text`
/// (the declarations) and checks it normalises to the same term.
fn reads_back(text: &str, p: &Program, simplified: &Term, what: &str) {
    for style in [Style::Unicode, Style::Ascii] {
        let printed = Printer::new(&p.ctx, style).term(simplified);
        let again_text = format!("{text}\nsimplify {printed}\n");
        let source = Source::new("roundtrip.ward", again_text.as_str());
        let again = parse_file(&source)
            .and_then(|file| lower(&source, &file))
            .unwrap_or_else(|e| {
                panic!(
                    "{what}: printed `{printed}` does not read back:\n{}",
                    e.render()
                )
            });
        let reread = normalize(&again.ctx, &last_expr(&again)).expect("normalises");
        assert_eq!(
            &reread, simplified,
            "{what}: `{printed}` read back as a different term"
        );
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
            ItemKind::Simplify { expr, expect, .. } => {
                std::iter::once(expr).chain(expect).collect()
            }
            ItemKind::Claim { lhs, rhs, .. }
            | ItemKind::Compare { lhs, rhs, .. }
            | ItemKind::Solve { lhs, rhs, .. }
            | ItemKind::Scan { lhs, rhs, .. } => vec![lhs, rhs],
            ItemKind::Evaluate { expr, .. } => vec![expr],
            ItemKind::Flux { body, rhs, .. } => vec![body, rhs],
            ItemKind::Derivation { start, steps, .. } => std::iter::once(start)
                .chain(steps.iter().map(|s| &s.expr))
                .collect(),
            ItemKind::Decompose { corr, .. } => vec![corr],
            ItemKind::Structures { corr, .. } => vec![corr],
            ItemKind::Perturb { corr, .. } => vec![corr],
            ItemKind::Classify { .. } => vec![],
        };
        for expr in exprs {
            let simplified = engine.simplify(expr).expect("simplifies").term;
            reads_back(
                &text,
                &p,
                &simplified,
                &format!("{path}, line {}", item.line),
            );
            checked += 1;
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

#[test]
fn integrated_cases_round_trip() {
    let mut paths: Vec<_> = std::fs::read_dir("tests/cases/integrated")
        .expect("the integrated cases exist")
        .map(|entry| entry.expect("a directory entry").path())
        .filter(|path| path.extension().is_some_and(|e| e == "ward"))
        .collect();
    paths.sort();
    assert!(!paths.is_empty(), "no integrated cases found");
    for path in paths {
        check_file(&path.to_string_lossy());
    }
}

/// Declarations for the hand-written expressions below. The `parallel`
/// statement right after `killing ntr translation n` is not read as that
/// generator's `parallel`. The claim only makes the file mention enough
/// index names for every dummy of the Killing vectors (see
/// `dummy_names_do_not_depend_on_the_names_a_file_mentions`).
const EXPLICIT: &str = "dimension d
halfspace y >= 0
scalar O dim Delta
scalar P dim Delta2
boundary scalar psi dim 3
function F G H
parameters r g
points x z x1 x2 x3 x4
boundary points s s1
killing ntr translation n
parallel a c
killing prot rotation omega parallel
killing sct special b
killing mix rotation n f
killing dil dilatation lambda
place x2 outside ball(x1, r)
place x3 inside ball(x1, r)
claim x1[nu] x1[nu] x2[rho] x2[rho] x3[sigma] x3[sigma] = x1[nu] x1[nu] x2[rho] x2[rho] x3[sigma] x3[sigma]
";

/// Simplifies each expression after [`EXPLICIT`] and checks that its
/// printed forms, read after the same text, give the same normal form.
fn explicit_round_trips(exprs: &[&str]) {
    let book = Arc::new(RuleBook::shipped().expect("shipped rules"));
    for expr in exprs {
        let text = format!("{EXPLICIT}simplify {expr}\n");
        let source = Source::new("roundtrip.ward", text.as_str());
        let p = parse_file(&source)
            .and_then(|file| lower(&source, &file))
            .unwrap_or_else(|e| panic!("`{expr}` is not valid input:\n{}", e.render()));
        let engine = Engine::new(p.ctx.clone(), book.clone(), Limits::default()).expect("engine");
        let simplified = engine.simplify(&last_expr(&p)).expect("simplifies").term;
        reads_back(&text, &p, &simplified, expr);
    }
}

#[test]
fn distances_and_functions_round_trip() {
    explicit_round_trips(&[
        "|x1 - x2|^(-2)",
        "|x2 - x1|^(-2 Delta) |x1 - x3|^(1/2)",
        "|x1 - x2|^(Delta - 2 Delta2) - 3/4 g^2 |x1 - x3|^(-Delta/2)",
        "|x1 - x2|^(3/2) |x1 - x3|^(-Delta) / (|x1 - x3| + |x2 - x3|)",
        "g * (g + 1)^(1/2) |x1 - x2| + d * (d - 1)^(-Delta)",
        "F(|x1 - x2|^2) + F'(|x1 - x2|^2) - 2 F''(xi(x1, x2)) G(g)",
        "F'(0)/F(|x1 - x2|^2)",
        "F(g) G(d - 1) + F(|x1 - x2|)^2/G'(g)",
        "F(xi(x1, x2)) (2 x1[n])^(-Delta) (2 x2[n])^(-Delta2)",
        "∂[mu](x1) { F(xi(x1, x2)) }",
        "∂[mu](x1) { ∂[mu](x2) { F(xi(x1, x2)) |x1 - x2|^(-Delta) } }",
        "x1[mu] x2[mu] + x1[n] x2[n] - x1∥[a] x2∥[a] + s[a] x1∥[a]",
        "par(x1)[a] par(x1)[a] - x1[n]^2 + g x1∥[c] s1[c]",
        "b[mu] x1[mu] omega[a,c] x1∥[a] x2∥[c] - f[a] x1[a] lambda",
        "omega[a,c] b[c] f[a] + b[n] x1[n]",
        "sct[mu](x1) ∂[mu](x1) { |x1 - x2|^(-2 Delta) }",
        "mix[mu](x1) ∂[mu](x1) { F(xi(x1, x2)) } + prot[mu](x2) ∂[mu](x2) { F(xi(x1, x2)) }",
        "dil[mu](x1) ∂[mu](x1) { |x1 - x2|^(-Delta) } + ntr[mu](x2) x2[mu]",
        "δ(x - x1) |x - x2|^(-2) + δ(y(x)) x∥[a] x∥[a] <D(x∥) O(x1)>",
    ]);
}

#[test]
fn hypergeometric_functions_and_several_variables_round_trip() {
    // ₂F₁ prints as `₂F₁(a, b; c; z)` (ASCII `F21(…)`), derivatives of a
    // function of several variables as `H[1,0](u, v)`.
    explicit_round_trips(&[
        "F21(g, g + 1; 2 g; -xi(x1, x2))",
        "₂F₁'(g, r; d/2; -1/xi(x1, x2)) xi(x1, x2)^g",
        "F21''(g, r; 2 g + 1; -xi(x1, x2)) + F21(g + 1, r + 1; 2 g + 2; -xi(x1, x2))",
        "f_bulk(Delta; xi(x1, x2)) + f_bdy'(Delta2; xi(x1, x2))",
        "∂[mu](x1) { f_bdy(Delta; xi(x1, x2)) }",
        "H(u(x1, x2, x3, x4), v(x1, x2, x3, x4)) |x1 - x2|^(-Delta)",
        "∂[mu](x1) { H(u(x1, x2, x3, x4), v(x1, x2, x3, x4)) }",
        "H[2,1](g, r) - H[0,1](g^2, xi(x1, x2))",
    ]);
}

#[test]
fn unevaluated_integrals_round_trip() {
    explicit_round_trips(&[
        "∫[x in ball(x1, r)] { |x - x1|^(-2) }",
        "∫[x in ball(x1, r/2)] { F(|x - x2|^2) <O(x) O(x2)> }",
        "∫[x in ball(x1, |x1 - x2| + r)] { x[mu] |x - x3|^(-4) } - x1[mu]",
        "∫[x in space] { |x - x1|^(-2) |x - x2|^(-2) }",
        "g ∫[x in space] { (|x - x1|^2 + x[n])^(-Delta) }",
        "∫[x in halfspace] { x[n]^(-Delta) <O(x) O(x1)> }",
        "∫[x in halfspace] { F(xi(x, x1)) x[n]^(-d) }",
        "∫[x∥ in boundary] { x∥[a] <D(x∥) O(x1)> }",
        "∫[x∥ in boundary] { |x∥ - x1|^(-2 Delta) <psi(s1) D(x∥)> }",
        "∫[s in boundary] { s[a] s[a] <psi(s) O(x1)> }",
        "∫[x∥ in boundary] { |x∥ - x1|^(-2) } ∫[z in ball(x1, r)] { |z - x2|^(-2) }",
        "∫[x in ball(x1, r)] { ∫[z in ball(x2, g)] { |x - z|^(-2) } }",
        "∫[x in halfspace] { ∂[mu](x) { ntr[nu](x) <T[mu,nu](x) O(x1) P(x2)> } }",
        "∫[x in halfspace] { ∂[mu](x) { mix[nu](x) <T[mu,nu](x) O(x1)> } }",
        "∫[x in ball(x1, r)] { δ(x - x3) |x - x2|^(-2) } + ∫[x in ball(x1, r)] { δ(x - x2) }",
        "∮[x on ball(x1, r)] { N[mu] x[mu] |x - x2|^(-2) }",
    ]);
}

#[test]
fn surface_integrals_that_are_not_a_flux_round_trip() {
    explicit_round_trips(&[
        "∮[x on ball(x1, r)] { |x - x1|^(-2) }",
        "∮[x on ball(x1, r)] { F(|x - x2|) <O(x) O(x2)> }",
        "g ∮[x on ball(x1, r)] { x[mu] x[mu] } - ∫[x in ball(x1, r)] { 1 }",
        "∮[x on ball(x1, 2 r)] { x[n] |x - x3|^(-Delta) } x1[mu]",
        "∮[z on ball(x1, r)] { |z - x2|^(-2) } + F'(∮[z on ball(x2, r)] { z[n] })",
    ]);
}

// Regressions: printed forms that once did not read back (denominators,
// powers of sums, generated dummy names, outward normals).

#[test]
fn merged_denominators_with_a_sum_round_trip() {
    explicit_round_trips(&[
        // Printed `1/((g - 1) (g + 1))`, read back as `(g^2 - 1)^(-1)`.
        "1/(g + 1)/(g - 1)",
        // Printed `1/((g + 1) |x1 - x2|)`, read back as one atom.
        "(g + 1)^(-1) |x1 - x2|^(-1)",
    ]);
}

#[test]
fn factored_coefficients_round_trip() {
    // Printed with factored polynomials in d and one bracketed denominator:
    // `(d - 2)^2/(d - 1)^2`, `3/(2 (g + 1))`, `- 1/(2 (d - 1)^2)`.
    explicit_round_trips(&[
        "(4 d - d^2 - 4)/(2 d - d^2 - 1)",
        "3/(2 (g + 1))",
        "- 1/2 (d - 1)^(-2)",
        "3 (g + 1)^(-2)/2",
        "(2 d^2 - 5 d + 3)/(d^2 + 1) |x1 - x2|^(-Delta)",
        "(d^2 - 1/4) g/(d - 3)",
        // A denominator whose collected sum carries its sign outside,
        // -(d - 1)^2, factors as the positive one does.
        "1/(2 d - d^2 - 1)",
        "g/(g^2 - 1) + 1/(g + 1)^2",
    ]);
}

#[test]
fn normal_form_is_idempotent_on_factored_denominators() {
    // Normalising twice gives the normal form again: the sum-cancelling
    // step must not rebuild an expanded denominator.
    for text in [
        "(4 d - d^2 - 4)/(2 d - d^2 - 1)",
        "1/(g^2 + 2 g + 1) - (g + 1)^(-2)",
        "(d^2 - 4)/(d^2 - 4 d + 4)",
    ] {
        let p = program(&format!("dimension d\nparameters g\nsimplify {text}\n"));
        let once = normalize(&p.ctx, &last_expr(&p)).expect("normalises");
        let twice = normalize(&p.ctx, &once).expect("normalises");
        assert_eq!(once, twice, "{text}");
    }
}

#[test]
fn negative_power_of_a_sum_in_a_product_round_trips() {
    // Printed `|x1 - x2|^2/(x1[n] + x2[n])^2`, read back as
    // `|x1 - x2|^2/(2 x1[n] x2[n] + x1[n]^2 + x2[n]^2)`.
    explicit_round_trips(&["(x1[n] + x2[n])^(-2) |x1 - x2|^2"]);
}

#[test]
fn fractional_negative_power_of_a_sum_round_trips() {
    // Printed `g/(g + 1)^(3/2)`, which normalises to a term that prints the
    // same but holds Pow(Pow(g + 1, 3/2), -1) instead of Pow(g + 1, -3/2).
    explicit_round_trips(&["g (g + 1)^(-3/2)"]);
}

#[test]
fn dummy_names_do_not_depend_on_the_names_a_file_mentions() {
    // The file mentions only `mu`; the expansion of `sct` needs two more
    // dummies, one named `k1`. Printed with `k1` and read back, the file
    // mentions `k1` too and the dummies are assigned differently.
    let book = Arc::new(RuleBook::shipped().expect("shipped rules"));
    let text = "dimension d\nparameters Delta\npoints x1 x2\nkilling sct special b\n\
                simplify sct[mu](x1) ∂[mu](x1) { |x1 - x2|^(-2 Delta) }\n";
    let p = program(text);
    let engine = Engine::new(p.ctx.clone(), book, Limits::default()).expect("engine");
    let simplified = engine.simplify(&last_expr(&p)).expect("simplifies").term;
    reads_back(text, &p, &simplified, "sct");
}

#[test]
fn outward_normals_stay_inside_their_surface_integral() {
    // Normal form `N[mu] N[nu] ∮[x on ball(x1, r)] { |x - x2|^(-2) }`: N
    // outside any surface integral, rejected on reading.
    explicit_round_trips(&["∮[x on ball(x1, r)] { N[mu] N[nu] |x - x2|^(-2) }"]);
}
