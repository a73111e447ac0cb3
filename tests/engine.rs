//! End-to-end behaviour of simplify and check on the shipped rules: the
//! local Ward identities W1 and W2 and the half-space divergence with the
//! displacement operator, for any number of insertions.
//!
//! Expected forms are the published identities: Di Francesco, Mathieu &
//! Sénéchal, "Conformal Field Theory" (1997), eq. 4.66 (divergence and
//! trace with scalar insertions), and Herzog, Huang & Jensen (2017),
//! arXiv:1709.07431 (∂_μ T^{μn} = D δ(y), the displacement term).

use std::path::Path;
use std::sync::Arc;

use wardsmith::diagnostic::Source;
use wardsmith::egraph::Limits;
use wardsmith::engine::Engine;
use wardsmith::lower::{lower, ItemKind};
use wardsmith::outcome::Status;
use wardsmith::rules::RuleBook;
use wardsmith::run::{run_source, Mode, Options};
use wardsmith::syntax::parse_file;
use wardsmith::term::print::{Printer, Style};

/// The printed normal form of every `simplify` statement of `text`.
fn simplify_all(text: &str) -> Vec<String> {
    let source = Source::new("test.ward", text);
    let program = lower(&source, &parse_file(&source).expect("parses")).expect("lowers");
    let engine = Engine::new(
        program.ctx.clone(),
        Arc::new(RuleBook::shipped().expect("shipped rules load")),
        Limits::default(),
    )
    .expect("engine");
    let printer = Printer::new(&program.ctx, Style::Ascii);
    program
        .items
        .iter()
        .filter_map(|item| match &item.kind {
            ItemKind::Simplify { expr, .. } => {
                Some(printer.term(&engine.simplify(expr).expect("simplifies").term))
            }
            _ => None,
        })
        .collect()
}

fn run(text: &str, mode: Mode) -> (String, i32) {
    let source = Source::new("test.ward", text);
    let out = run_source(&source, Path::new("."), mode, &Options::default()).expect("runs");
    (out.report, out.code)
}

const BULK: &str = "dimension 4\nscalar O dim Delta\nscalar A dim Delta1\nscalar B dim Delta2\nscalar C dim 3/2\npoints x x1 x2 x3\n";

const WALL: &str = "dimension d\nhalfspace y >= 0\nscalar O dim Delta\nboundary scalar psi dim 3\npoints x x1\nboundary points s1\nparallel a b\n";

#[test]
fn divergence_gives_one_contact_term_per_insertion() {
    // Di Francesco et al. (1997), eq. 4.66.
    let out = simplify_all(&format!(
        "{BULK}simplify ∂[mu](x) <T[mu,nu](x) O(x1) O(x2)>"
    ));
    assert_eq!(
        out,
        ["- delta(x - x1) del[nu](x1) <O(x1) O(x2)> - delta(x - x2) del[nu](x2) <O(x1) O(x2)>"]
    );
}

#[test]
fn trace_carries_each_dimension_exactly() {
    // Di Francesco et al. (1997), eq. 4.66: ⟨T_μμ X⟩ = -Σ δ(x - x_i) Δ_i ⟨X⟩.
    let out = simplify_all(&format!("{BULK}simplify <T[mu,mu](x) A(x1) B(x2) C(x3)>"));
    assert_eq!(
        out,
        ["- Delta1 delta(x - x1) <A(x1) B(x2) C(x3)> - Delta2 delta(x - x2) <A(x1) B(x2) C(x3)> - 3/2 delta(x - x3) <A(x1) B(x2) C(x3)>"]
    );
}

#[test]
fn halfspace_divergence_has_bulk_boundary_and_displacement_terms() {
    // Herzog, Huang & Jensen (2017), arXiv:1709.07431: ∂_μ T^{μn} = D δ(x_n).
    let out = simplify_all(&format!(
        "{WALL}simplify ∂[mu](x) <T[mu,nu](x) O(x1) psi(s1)>\n\
         simplify n[nu] ∂[mu](x) <T[mu,nu](x) O(x1) psi(s1)>\n\
         simplify ∂[mu](x) <T[mu,a](x) O(x1) psi(s1)>"
    ));
    assert_eq!(
        out,
        [
            "- delta(x - x1) del[nu](x1) <O(x1) psi(s1)> - delta(x - s1) del[nu](s1) <O(x1) psi(s1)> + delta(y(x)) n[nu] <D(par(x)) O(x1) psi(s1)>",
            // Normal component: the boundary insertion moves only along the
            // wall, and the D term comes with coefficient exactly 1.
            "- delta(x - x1) del[n](x1) <O(x1) psi(s1)> + delta(y(x)) <D(par(x)) O(x1) psi(s1)>",
            // Parallel component: no displacement term.
            "- delta(x - x1) del[a](x1) <O(x1) psi(s1)> - delta(x - s1) del[a](s1) <O(x1) psi(s1)>",
        ]
    );
}

/// A file with `bulk` bulk and `boundary` boundary insertions in the divergence.
fn many_insertions(bulk: usize, boundary: usize) -> String {
    let mut text = String::from(
        "dimension 3\nhalfspace y >= 0\nscalar O dim Delta\nboundary scalar psi dim 2\n",
    );
    let bulk_points: Vec<String> = (1..=bulk).map(|i| format!("x{i}")).collect();
    let boundary_points: Vec<String> = (1..=boundary).map(|i| format!("s{i}")).collect();
    text += &format!("points x {}\n", bulk_points.join(" "));
    text += &format!("boundary points {}\n", boundary_points.join(" "));
    let inserts: Vec<String> = bulk_points
        .iter()
        .map(|p| format!("O({p})"))
        .chain(boundary_points.iter().map(|p| format!("psi({p})")))
        .collect();
    text += &format!("simplify ∂[mu](x) <T[mu,nu](x) {}>\n", inserts.join(" "));
    text
}

#[test]
fn sixteen_insertions_give_byte_identical_output() {
    let text = many_insertions(8, 8);
    let (first, code) = run(&text, Mode::Simplify);
    assert_eq!(code, 0);
    for _ in 0..3 {
        assert_eq!(run(&text, Mode::Simplify).0, first);
    }
    let normal_form = simplify_all(&text).pop().expect("one statement");
    // 16 contact terms and the displacement term.
    assert_eq!(normal_form.matches("delta(x - ").count(), 16);
    assert_eq!(normal_form.matches("delta(y(x))").count(), 1);
    insta::assert_snapshot!(first);
}

#[test]
fn a_sign_error_is_not_proved_and_says_why() {
    let (report, code) = run(
        &format!(
            "{BULK}claim ∂[mu](x) <T[mu,nu](x) O(x1) O(x2)> = δ(x - x1) ∂[nu](x1) <O(x1) O(x2)> - δ(x - x2) ∂[nu](x2) <O(x1) O(x2)>"
        ),
        Mode::Check,
    );
    assert_eq!(code, 1);
    assert!(report.contains("NOT PROVED"), "{report}");
    assert!(
        report.contains("- 2 δ(x - x1) ∂[nu](x1) ⟨O(x1) O(x2)⟩"),
        "{report}"
    );
    assert!(
        report.contains("stop reason: the rules saturated"),
        "{report}"
    );
    assert!(report.ends_with("0 proved, 1 not proved\n"), "{report}");
}

#[test]
fn a_limit_makes_a_claim_unknown_not_false() {
    let source = Source::new(
        "test.ward",
        format!("{BULK}claim <T[mu,mu](x) O(x1) O(x2)> = 0"),
    );
    let opts = Options {
        limits: Limits {
            iterations: 1,
            nodes: 1,
            ..Limits::default()
        },
        ..Options::default()
    };
    let out = run_source(&source, Path::new("."), Mode::Check, &opts).expect("runs");
    assert_eq!(out.code, 1);
    let checked = out.checked.expect("an outcome");
    let claim = &checked.statements[0];
    assert_eq!(claim.status, Some(Status::Unknown), "{}", out.report);
    let wardsmith::outcome::Finding::Claim(c) = &claim.finding else {
        panic!("not a claim: {claim:?}");
    };
    assert!(!c.check.search.stop.is_saturated(), "{}", out.report);
    // Counted unknown, not refuted.
    assert_eq!((checked.tally.unknown, checked.tally.not_proved), (1, 0));
    assert!(out.report.contains("UNKNOWN"), "{}", out.report);
}

/// The engine's outer loop stopped before a fixpoint leaves the claim
/// unknown with the round limit named, where a saturated search would
/// refute it (the same sign error as above).
#[test]
fn the_round_limit_makes_a_claim_unknown_not_false() {
    let source = Source::new(
        "test.ward",
        format!(
            "{BULK}claim ∂[mu](x) <T[mu,nu](x) O(x1) O(x2)> = δ(x - x1) ∂[nu](x1) <O(x1) O(x2)> - δ(x - x2) ∂[nu](x2) <O(x1) O(x2)>"
        ),
    );
    let opts = Options {
        limits: Limits {
            rounds: 1,
            ..Limits::default()
        },
        ..Options::default()
    };
    let out = run_source(&source, Path::new("."), Mode::Check, &opts).expect("runs");
    let checked = out.checked.expect("an outcome");
    let wardsmith::outcome::Finding::Claim(c) = &checked.statements[0].finding else {
        panic!("not a claim");
    };
    assert_eq!(c.check.search.stop, wardsmith::egraph::Stop::RoundLimit(1));
    assert_eq!(checked.statements[0].status, Some(Status::Unknown));
    assert_eq!((checked.tally.unknown, checked.tally.not_proved), (1, 0));
    assert!(
        out.report.contains("stopped at the round limit"),
        "{}",
        out.report
    );
    // With its rounds the same claim is refuted.
    let out = run_source(&source, Path::new("."), Mode::Check, &Options::default()).expect("runs");
    assert_eq!(out.checked.expect("an outcome").tally.not_proved, 1);
}

#[test]
fn index_algebra_traces_and_projections() {
    // Common practice: δ_μμ = d, δ_aa = d - 1 along the wall, n·n = 1.
    let out = simplify_all(&format!(
        "{WALL}simplify δ[mu,mu]\nsimplify δ[a,a]\nsimplify n[mu] n[mu]\nsimplify n[a]\n\
         simplify δ[mu,a] n[mu]\nsimplify δ[mu,nu] δ[nu,rho] δ[rho,mu]"
    ));
    assert_eq!(out, ["d", "d - 1", "1", "0", "0", "d"]);
}

#[test]
fn user_rule_file_for_a_conserved_current() {
    // The rule lives in examples/u1-current.rules; no Rust code knows J.
    let out = wardsmith::run::run_path(
        Path::new("examples/charged-current.ward"),
        Mode::Simplify,
        &Options::default(),
    )
    .expect("runs");
    assert!(
        out.report
            .contains("= - δ(x - x1) ⟨q(x1) qbar(x2) m(x3)⟩ + δ(x - x2) ⟨q(x1) qbar(x2) m(x3)⟩"),
        "{}",
        out.report
    );
    assert!(
        out.report.contains("rules: current-conservation ×1"),
        "{}",
        out.report
    );
}

#[test]
fn zero_stands_for_a_tensor_of_any_rank() {
    // Away from the boundary and with no insertions T is conserved: the
    // divergence of <T> alone is zero, written `= 0` with nu free.
    let (report, code) = run(
        &format!("{BULK}claim ∂[mu](x) <T[mu,nu](x)> = 0\nclaim 0 = ∂[mu](x) <T[mu,nu](x) O(x1)> + δ(x - x1) ∂[nu](x1) <O(x1)>"),
        Mode::Check,
    );
    assert_eq!(code, 0, "{report}");
    assert!(report.ends_with("2 proved, 0 not proved\n"), "{report}");
}

#[test]
fn contraction_memo_gives_the_normal_form_of_each_term_alone() {
    // The normaliser remembers the index algebra of a monomial by its
    // factors (src/normal/mod.rs `contracted`): the same dot products with
    // different atoms, in one sum, must normalise to the sum of the terms
    // normalised one by one (each with a fresh memo).
    let source = Source::new(
        "memo.ward",
        "dimension 4\nhalfspace y >= 0\nparameters a\npoints x1 x2 x3\n\
         simplify (x1[i] - x3[i]) (x2[i] - x3[i]) |x1 - x2|^a\n\
           + (x1[i] - x3[i]) (x2[i] - x3[i]) |x1 - x3|^2 δ[k,j] x2[j] x1[k]\n\
           - 3 (x1[i] - x3[i]) (x2[i] - x3[i]) |x2 - x3|^(-a) x1[n]\n",
    );
    let program = lower(&source, &parse_file(&source).expect("parses")).expect("lowers");
    let Some(ItemKind::Simplify { expr, .. }) = program.items.last().map(|i| &i.kind) else {
        panic!("the file ends with a simplify");
    };
    let wardsmith::term::Term::Add(terms) = expr else {
        panic!("a sum: {expr:?}");
    };
    let ctx = &program.ctx;
    let together = wardsmith::normal::normalize(ctx, expr).expect("normalises");
    let alone: Vec<_> = terms
        .iter()
        .map(|t| wardsmith::normal::normalize(ctx, t).expect("normalises"))
        .collect();
    let summed =
        wardsmith::normal::normalize(ctx, &wardsmith::term::Term::Add(alone)).expect("normalises");
    assert_eq!(together, summed);
    assert!(!together.is_zero());
}
