//! Benchmarks of `simplify` on the local Ward identity with N insertions,
//! half bulk and half boundary, in a half-space: parse, lower and simplify.
//!
//! Also the check of the longest shipped derivation. Run with
//! `cargo bench --bench simplify`. The e-node count of each size is
//! printed once before timing, so both figures come from one run.

use std::path::Path;

use wardsmith::diagnostic::Source;
use wardsmith::run::{run_source, Mode, Options};

fn main() {
    for n in SIZES {
        let text = file(n);
        let out = run_source(
            &Source::new("bench.ward", text),
            Path::new("."),
            Mode::Simplify,
            &Options::default(),
        )
        .expect("benchmark input is valid");
        let nodes = out
            .report
            .split(" e-nodes")
            .next()
            .and_then(|s| s.rsplit(", ").next())
            .unwrap_or("?");
        eprintln!("{n:>2} insertions: {nodes} e-nodes");
    }
    divan::main();
}

const SIZES: [usize; 4] = [2, 4, 8, 16];

/// A `.ward` file whose one statement is ∂_μ⟨T_{μν}(x) X⟩ with `n` insertions.
fn file(n: usize) -> String {
    let bulk = n / 2;
    let boundary = n - bulk;
    let bulk_points: Vec<String> = (1..=bulk).map(|i| format!("x{i}")).collect();
    let boundary_points: Vec<String> = (1..=boundary).map(|i| format!("s{i}")).collect();
    let inserts: Vec<String> = bulk_points
        .iter()
        .map(|p| format!("O({p})"))
        .chain(boundary_points.iter().map(|p| format!("psi({p})")))
        .collect();
    format!(
        "dimension d\nhalfspace y >= 0\nscalar O dim Delta\nboundary scalar psi dim 3\n\
         points x {}\nboundary points {}\nsimplify ∂[mu](x) <T[mu,nu](x) {}>\n",
        bulk_points.join(" "),
        boundary_points.join(" "),
        inserts.join(" ")
    )
}

#[divan::bench(args = SIZES)]
fn simplify_divergence(bencher: divan::Bencher, n: usize) {
    let source = Source::new("bench.ward", file(n));
    bencher.bench(|| {
        run_source(&source, Path::new("."), Mode::Simplify, &Options::default()).expect("valid")
    });
}

/// 128 insertions, in each output form: at this size printing the report
/// is a large part of the run, so only the form asked for is built.
#[divan::bench(args = ["text", "json", "latex"], sample_count = 5, sample_size = 1)]
fn simplify_divergence_128(bencher: divan::Bencher, form: &str) {
    let source = Source::new("bench.ward", file(128));
    let opts = Options {
        json: form == "json",
        style: if form == "latex" {
            wardsmith::term::print::Style::Latex
        } else {
            wardsmith::term::print::Style::Unicode
        },
        ..Options::default()
    };
    bencher.bench(|| run_source(&source, Path::new("."), Mode::Simplify, &opts).expect("valid"));
}

/// The special conformal Ward identity on the scalar three-point function
/// with symbolic dimensions in d = 4 (tests/cases/integrated/three-point-special.ward).
const SPECIAL: &str = "dimension 4
parameters Delta1 Delta2 Delta3
points x1 x2 x3
killing sct special b
let G = |x1 - x2|^(Delta3 - Delta1 - Delta2) |x1 - x3|^(Delta2 - Delta1 - Delta3) |x2 - x3|^(Delta1 - Delta2 - Delta3)
claim sct[mu](x1) ∂[mu](x1) { G } + Delta1/4 ∂[k](x1) { sct[k](x1) } G
    + sct[mu](x2) ∂[mu](x2) { G } + Delta2/4 ∂[k](x2) { sct[k](x2) } G
    + sct[mu](x3) ∂[mu](x3) { G } + Delta3/4 ∂[k](x3) { sct[k](x3) } G
    = 0
";

/// Whole file: parse, lower, load rules, prove the claim.
#[divan::bench]
fn verify_special_conformal_file(bencher: divan::Bencher) {
    let source = Source::new("special.ward", SPECIAL);
    bencher.bench(|| {
        let out =
            run_source(&source, Path::new("."), Mode::Check, &Options::default()).expect("valid");
        assert_eq!(out.code, 0);
        out
    });
}

/// The special conformal claim on a product of powers of all distances
/// between n points, every exponent a symbol, in d = 4
/// (tests/cases/integrated/special-conformal-n{3,4,5,6}.ward), whole file.
/// Target of issue 11: each under 100 ms.
#[divan::bench(args = [3, 4, 5, 6])]
fn verify_special_conformal_n_points(bencher: divan::Bencher, n: usize) {
    let text = match n {
        3 => include_str!("../tests/cases/integrated/special-conformal-n3.ward"),
        4 => include_str!("../tests/cases/integrated/special-conformal-n4.ward"),
        5 => include_str!("../tests/cases/integrated/special-conformal-n5.ward"),
        _ => include_str!("../tests/cases/integrated/special-conformal-n6.ward"),
    };
    let source = Source::new("special.ward", text);
    bencher.bench(|| {
        let out =
            run_source(&source, Path::new("."), Mode::Check, &Options::default()).expect("valid");
        assert_eq!(out.code, 0, "{}", out.report);
        out
    });
}

/// The proof alone: the engine on the lowered claim.
#[divan::bench]
fn verify_special_conformal_engine(bencher: divan::Bencher) {
    use std::sync::Arc;
    use wardsmith::engine::Engine;
    use wardsmith::lower::{lower, ItemKind};
    let source = Source::new("special.ward", SPECIAL);
    let program = lower(
        &source,
        &wardsmith::syntax::parse_file(&source).expect("parses"),
    )
    .expect("lowers");
    let engine = Engine::new(
        program.ctx.clone(),
        Arc::new(wardsmith::rules::RuleBook::shipped().expect("rules")),
        wardsmith::egraph::Limits::default(),
    )
    .expect("engine");
    let Some(ItemKind::Claim { lhs, rhs, .. }) = program.items.last().map(|i| &i.kind) else {
        panic!("the benchmark file ends with a claim");
    };
    bencher.bench(|| {
        let v = engine.check(lhs, rhs).expect("checks");
        // Derivatives of powers of distances hold away from coincident
        // points: the file's verdict is "proved away", which also passes.
        assert!(v.holds(), "the special conformal claim holds");
        v
    });
}

/// The longest shipped derivation (six steps, wall normal translation),
/// checked through the whole pipeline as `wardsmith check` runs it.
#[divan::bench]
fn check_wall_derivation(bencher: divan::Bencher) {
    let text = include_str!("../examples/wall-derivation.ward");
    let source = Source::new("wall-derivation.ward", text);
    bencher.bench(|| {
        let out =
            run_source(&source, Path::new("."), Mode::Check, &Options::default()).expect("valid");
        assert_eq!(out.code, 0);
        out
    });
}

/// The same with egg's explanations recorded in every e-graph (the engine
/// does not need them: the rules that fired come from the runner's
/// counts); the difference is the cost explanations would add.
#[divan::bench]
fn check_wall_derivation_with_explanations(bencher: divan::Bencher) {
    let text = include_str!("../examples/wall-derivation.ward");
    let source = Source::new("wall-derivation.ward", text);
    let mut opts = Options::default();
    opts.limits.explanations = true;
    bencher.bench(|| {
        let out = run_source(&source, Path::new("."), Mode::Check, &opts).expect("valid");
        assert_eq!(out.code, 0);
        out
    });
}
