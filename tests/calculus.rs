//! A numeric oracle for the symbolic calculus of the normaliser.
//!
//! Each test runs `.ward` text through the library (parse → lower → engine
//! with the shipped rules), evaluates the engine's normal form numerically
//! at seeded random points, and compares it with an independent evaluation:
//! the undifferentiated expression is evaluated with truncated Taylor
//! numbers ("jets", forward mode), so each `∂[i](p)` becomes the exact
//! numeric derivative along p[i] without consulting any symbolic rule
//! (`tests/calculus_support`). The jets are themselves checked against
//! sixth-order central differences.
//!
//! - `distance_powers_*`: derivatives of powers of distances with symbolic
//!   exponents, products of distances, coordinates, second derivatives,
//!   mixed derivatives in two points, the harmonic |x|^(2-d).
//! - `cross_ratio_*`: the chain rule through ξ = |x1 - x2|²/(4 y1 y2) next to
//!   a wall, for two concrete choices of F.
//! - `killing_vectors_*`: the expanded conformal Killing vectors, their
//!   Jacobians and divergences against docs/conventions.md §2.
//! - `sifted_integrals_*`: ∫ δ(x - p) f(x) = f(p) inside the ball, 0 outside.
//! - `oracle_agrees_with_central_differences`, `perturbed_answers_fail`:
//!   the oracle is accurate, and the comparison is not vacuous.

mod calculus_support;
mod support;

use std::sync::Arc;

use calculus_support::{
    assignments, derivatives_only_on_correlators, free_indices, Differentiate, Model, SplitMix64,
    Unknown,
};
use num_rational::BigRational;
use wardsmith::context::Context;
use wardsmith::diagnostic::Source;
use wardsmith::egraph::Limits;
use wardsmith::engine::Engine;
use wardsmith::lower::{lower, ItemKind};
use wardsmith::rules::RuleBook;
use wardsmith::syntax::parse_file;
use wardsmith::term::print::{Printer, Style};
use wardsmith::term::Term;

/// Required agreement (relative).
const TOL: f64 = 1e-9;

/// Random point sets per statement.
const SAMPLES: usize = 6;

// ───────────────────────── the engine side ─────────────────────────

/// One `simplify` statement: the lowered input and the engine's normal form.
struct Case {
    input: Term,
    output: Term,
    /// The input as printed.
    input_text: String,
    /// Input and output as printed, for failure messages.
    printed: String,
}

/// Every `simplify` statement of `text`, with the file's declarations.
fn simplify_all(text: &str) -> (Arc<Context>, Vec<Case>) {
    let source = Source::new("calculus.ward", text);
    let file = parse_file(&source).unwrap_or_else(|e| panic!("{}", e.render()));
    let program = lower(&source, &file).unwrap_or_else(|e| panic!("{}", e.render()));
    let book = Arc::new(RuleBook::shipped().unwrap_or_else(|e| panic!("{}", e.render())));
    let engine = Engine::new(program.ctx.clone(), book, Limits::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    let printer = Printer::new(&program.ctx, Style::Ascii);
    let cases = program
        .items
        .iter()
        .filter_map(|item| match &item.kind {
            ItemKind::Simplify { expr, .. } => {
                let output = engine
                    .simplify(expr)
                    .unwrap_or_else(|e| panic!("{}", e.render()))
                    .term;
                Some(Case {
                    input: expr.clone(),
                    input_text: printer.term(expr),
                    printed: format!("{}  =  {}", printer.term(expr), printer.term(&output)),
                    output,
                })
            }
            _ => None,
        })
        .collect();
    (program.ctx.clone(), cases)
}

// ───────────────────────── comparison ─────────────────────────

/// Values of `t` for every assignment of `free`.
fn values(model: &Model, t: &Term, free: &[String]) -> Vec<f64> {
    assignments(model.ctx, model.d, free)
        .iter()
        .map(|a| {
            let a: Vec<(&str, usize)> = a.iter().map(|(k, v)| (k.as_str(), *v)).collect();
            model.eval(t, &a)
        })
        .collect()
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter().fold(0.0, |m, x| m.max(x.abs()))
}

/// max |a - b| / scale over all components.
fn rel_error(a: &[f64], b: &[f64], scale: f64) -> f64 {
    assert!(scale > 0.0 && scale.is_finite(), "scale {scale}");
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max)
        / scale
}

/// Relative error of the engine's normal form against the oracle's value of
/// the input, over all values of the free indices; `scale` (if any)
/// replaces the size of the oracle's value, for quantities that vanish.
fn discrepancy(model: &Model, input: &Term, output: &Term, scale: Option<f64>) -> f64 {
    let free = free_indices(input);
    assert_eq!(free_indices(output), free, "free indices differ");
    // The oracle evaluates at generic points, where δ-functions vanish.
    let output = &pointwise(output);
    let oracle = values(model, input, &free);
    let engine = values(model, output, &free);
    rel_error(&engine, &oracle, scale.unwrap_or_else(|| max_abs(&oracle)))
}

/// The engine's derivative agrees with the oracle's at `SAMPLES` random
/// models. `tune` sets parameters or functions on each model; `scale`
/// gives the size for vanishing quantities. Returns the worst error.
fn agree(
    ctx: &Context,
    d: usize,
    case: &Case,
    rng: &mut SplitMix64,
    tune: &dyn Fn(&mut Model, &mut SplitMix64),
    scale: &dyn Fn(&Model) -> Option<f64>,
) -> f64 {
    assert!(
        derivatives_only_on_correlators(&case.output),
        "the engine left a derivative of an explicit function: {}",
        case.printed
    );
    let mut worst: f64 = 0.0;
    for _ in 0..SAMPLES {
        let mut model = Model::random(ctx, d, rng);
        tune(&mut model, rng);
        let err = discrepancy(&model, &case.input, &case.output, scale(&model));
        assert!(
            err < TOL,
            "d = {d}: {}\n  relative error {err:e} at points {:?}, scalars {:?}",
            case.printed,
            model.points,
            model.scalars
        );
        worst = worst.max(err);
    }
    worst
}

/// A normal form without its δ-function terms: its value at generic
/// points, away from every coincidence.
fn pointwise(t: &Term) -> Term {
    let keep = |s: &Term| {
        let factors = match s {
            Term::Mul(fs) => fs.as_slice(),
            f => std::slice::from_ref(f),
        };
        !factors
            .iter()
            .any(|f| matches!(f, Term::DeltaFn(..) | Term::DeltaY(_)))
    };
    match t {
        Term::Add(ts) => {
            let kept: Vec<Term> = ts.iter().filter(|s| keep(s)).cloned().collect();
            match kept.len() {
                0 => Term::zero(),
                1 => kept[0].clone(),
                _ => Term::Add(kept),
            }
        }
        t if keep(t) => t.clone(),
        _ => Term::zero(),
    }
}

fn no_tuning(_: &mut Model, _: &mut SplitMix64) {}

fn own_scale(_: &Model) -> Option<f64> {
    None
}

// ───────────────────────── 1. distances and coordinates ─────────────────────────

fn distance_powers(d: usize, seed: u64) {
    // Common practice: ∂_i |p - q|^a = a |p - q|^(a-2) (p - q)_i, the Leibniz
    // rule, ∂_i p_k = δ_ik; the oracle differentiates numerically.
    let text = format!(
        "dimension {d}\nparameters a b c\npoints x1 x2 x3\n\
         simplify ∂[mu](x1) {{ |x1 - x2|^a }}\n\
         simplify ∂[mu](x2) {{ |x1 - x2|^a }}\n\
         simplify ∂[mu](x1) {{ |x1 - x2|^a |x1 - x3|^b |x2 - x3|^c }}\n\
         simplify ∂[mu](x3) {{ |x1 - x2|^a |x1 - x3|^b |x2 - x3|^c }}\n\
         simplify ∂[mu](x1) {{ x1[nu] }}\n\
         simplify ∂[mu](x1) {{ x1[nu] x1[nu] }}\n\
         simplify ∂[mu](x1) {{ x2[mu] x1[nu] |x1 - x2|^(a - 1) }}\n\
         simplify ∂[mu](x1) {{ x1[mu] |x1 - x3|^(-b) }}\n\
         simplify ∂[mu](x1) ∂[nu](x1) {{ |x1 - x2|^a }}\n\
         simplify ∂[mu](x1) ∂[mu](x1) {{ |x1 - x2|^a }}\n\
         simplify ∂[mu](x1) ∂[mu](x1) {{ |x1 - x2|^a |x1 - x3|^b }}\n\
         simplify ∂[mu](x1) ∂[nu](x2) {{ |x1 - x2|^a }}\n\
         simplify ∂[mu](x1) ∂[nu](x2) {{ |x1 - x2|^a |x2 - x3|^b |x1 - x3|^c }}\n\
         simplify ∂[mu](x1) ∂[mu](x2) {{ |x1 - x2|^a x1[nu] x2[nu] }}\n\
         simplify ∂[mu](x1) ∂[nu](x2) ∂[rho](x3) {{ |x1 - x2|^a |x2 - x3|^b |x1 - x3|^c }}\n"
    );
    let (ctx, cases) = simplify_all(&text);
    assert_eq!(cases.len(), 15);
    let mut rng = SplitMix64::new(seed);
    // Symbolic exponents set to random reals, including negative ones.
    let exponents = |m: &mut Model, rng: &mut SplitMix64| {
        for p in ["a", "b", "c"] {
            m.set(p, rng.uniform(-3.0, 3.0));
        }
    };
    let mut worst: f64 = 0.0;
    for case in &cases {
        let err = agree(&ctx, d, case, &mut rng, &exponents, &own_scale);
        println!("d = {d}: {err:.1e}  {}", case.input_text);
        worst = worst.max(err);
    }
    println!("distance powers d = {d}: worst relative error {worst:.2e}");
}

#[test]
fn distance_powers_d3() {
    distance_powers(3, 0xca1c_0301);
}

#[test]
fn distance_powers_d4() {
    distance_powers(4, 0xca1c_0401);
}

/// |x1 - x2|^(2-d) is harmonic away from x2, and as a distribution its
/// Laplacian is -(d - 2) S_d δ(x1 - x2) and its Hessian carries
/// -(d - 2) S_d δ_μν δ(x1 - x2)/d (Gauss's law, the Green's function of the
/// Laplacian: common practice). The engine's contact terms are exactly
/// these; away from x2 its values agree with the oracle's, against the size
/// of the Hessian's diagonal. With `dimension d` and with d a number.
fn harmonic(d: usize, seed: u64) {
    let mut rng = SplitMix64::new(seed);
    let mut worst: f64 = 0.0;
    for dimension in [format!("{d}"), "d".to_string()] {
        let text = format!(
            "dimension {dimension}\npoints x1 x2\n\
             simplify ∂[mu](x1) ∂[mu](x1) {{ |x1 - x2|^(2 - d) }}\n\
             simplify ∂[mu](x1) ∂[nu](x1) {{ |x1 - x2|^(2 - d) }}\n"
        );
        let text = if dimension == "d" {
            text
        } else {
            text.replace("(2 - d)", &format!("({})", 2 - d as i64))
        };
        let (ctx, cases) = simplify_all(&text);
        let printer = Printer::new(&ctx, Style::Ascii);
        let gauss = if dimension == "d" {
            "-(d - 2) S_d".to_string()
        } else {
            format!("-{} S_d", d - 2)
        };
        let (_, expected) = simplify_all(&format!(
            "dimension {dimension}\npoints x1 x2\n\
             simplify {gauss} delta(x1 - x2)\n\
             simplify {gauss}/d delta[mu,nu] delta(x1 - x2)\n"
        ));
        assert_eq!(
            printer.term(&cases[0].output),
            printer.term(&expected[0].output),
            "the Laplacian of |x1 - x2|^(2-d): {}",
            cases[0].printed
        );
        let contact = cases[1].output.clone();
        let Term::Add(hessian_terms) = &contact else {
            panic!("the Hessian has no contact term: {}", cases[1].printed);
        };
        assert!(
            hessian_terms.contains(&expected[1].output),
            "the Hessian's contact term: {}",
            cases[1].printed
        );
        let hessian = &cases[1].input;
        let size = |m: &Model| {
            let free = free_indices(hessian);
            Some(max_abs(&values(m, hessian, &free)))
        };
        worst = worst.max(agree(&ctx, d, &cases[0], &mut rng, &no_tuning, &size));
        worst = worst.max(agree(&ctx, d, &cases[1], &mut rng, &no_tuning, &own_scale));
    }
    println!("harmonic d = {d}: worst relative error {worst:.2e}");
}

#[test]
fn harmonic_d3() {
    harmonic(3, 0xca1c_0302);
}

#[test]
fn harmonic_d4() {
    harmonic(4, 0xca1c_0402);
}

// ───────────────────────── 2. the cross-ratio ─────────────────────────

fn cross_ratio(d: usize, seed: u64) {
    // Common practice: the chain rule ∂_i F(ξ) = F'(ξ) ∂_i ξ through
    // ξ = |x1 - x2|²/(4 y1 y2) (docs/conventions.md §7 for ξ); the oracle uses the
    // closed-form F^(k) of each concrete F. With `dimension d` and with d a
    // number.
    let mut rng = SplitMix64::new(seed);
    let mut worst: f64 = 0.0;
    for dimension in [format!("{d}"), "d".to_string()] {
        cross_ratio_in(d, &dimension, &mut rng, &mut worst);
    }
    println!("cross-ratio d = {d}: worst relative error {worst:.2e}");
}

fn cross_ratio_in(d: usize, dimension: &str, rng: &mut SplitMix64, worst: &mut f64) {
    let text = format!(
        "dimension {dimension}\nhalfspace y >= 0\nparameters Delta Delta1 Delta2\npoints x1 x2\n\
         function F\n\
         simplify ∂[mu](x1) {{ F(xi(x1, x2)) (x2[n])^(-Delta) }}\n\
         simplify ∂[mu](x2) {{ F(xi(x1, x2)) (x2[n])^(-Delta) }}\n\
         simplify ∂[n](x1) {{ F(xi(x1, x2)) (x2[n])^(-Delta) }}\n\
         simplify ∂[mu](x1) ∂[nu](x1) {{ F(xi(x1, x2)) (2 x1[n])^(-Delta1) (2 x2[n])^(-Delta2) }}\n\
         simplify ∂[mu](x1) ∂[mu](x1) {{ F(xi(x1, x2)) (2 x1[n])^(-Delta1) (2 x2[n])^(-Delta2) }}\n\
         simplify ∂[mu](x1) ∂[nu](x2) {{ F(xi(x1, x2)) (2 x1[n])^(-Delta1) (2 x2[n])^(-Delta2) }}\n\
         simplify ∂[mu](x1) {{ F''(xi(x1, x2)) |x1 - x2|^(-Delta) }}\n\
         simplify ∂[n](x1) ∂[mu](x2) ∂[mu](x2) {{ F(xi(x1, x2)) x1[n]^Delta }}\n"
    );
    let (ctx, cases) = simplify_all(&text);
    for f in [Unknown::ExpMinus, Unknown::PowerRatio] {
        let choose = move |m: &mut Model, rng: &mut SplitMix64| {
            m.functions.insert("F".into(), f);
            for p in ["Delta", "Delta1", "Delta2"] {
                m.set(p, rng.uniform(0.5, 3.0));
            }
        };
        for case in &cases {
            let err = agree(&ctx, d, case, rng, &choose, &own_scale);
            println!(
                "dimension {dimension}, {f:?}: {err:.1e}  {}",
                case.input_text
            );
            *worst = worst.max(err);
        }
    }
}

#[test]
fn cross_ratio_d3() {
    cross_ratio(3, 0xca1c_0303);
}

#[test]
fn cross_ratio_d4() {
    cross_ratio(4, 0xca1c_0403);
}

// ───────────────────────── 3. Killing vectors ─────────────────────────

/// ε_μ(x) and ∂_μ ε_ν(x) of each family by hand (docs/conventions.md §2; the
/// half-space families as in DEVELOPERS.md and context.rs: ε = n for the
/// normal translation, ε = n (f·x) - f y for the rotation mixing n with the
/// parallel f, ε = 2 y x - x² n for the normal special conformal one).
fn killing_by_hand(m: &Model, family: &str, x: &[f64], mu: usize) -> f64 {
    let d = m.d;
    let vec = |name: &str| -> Vec<f64> { (0..d).map(|k| m.tensor(name, &[k])).collect() };
    let normal: Vec<f64> = (0..d).map(|k| f64::from(u8::from(k == d - 1))).collect();
    let dot = |a: &[f64], b: &[f64]| -> f64 { a.iter().zip(b).map(|(p, q)| p * q).sum() };
    let special = |b: &[f64]| 2.0 * dot(b, x) * x[mu] - dot(x, x) * b[mu];
    match family {
        "tr" => vec("a")[mu],
        "rot" => (0..d).map(|k| m.tensor("omega", &[mu, k]) * x[k]).sum(),
        "dil" => m.scalars["lambda"] * x[mu],
        "sct" => special(&vec("b")),
        "psct" => special(&vec("c")),
        "ntr" => normal[mu],
        "mix" => normal[mu] * dot(&vec("f"), x) - vec("f")[mu] * x[d - 1],
        "nsct" => special(&normal),
        _ => unreachable!(),
    }
}

/// ∂·ε by hand: 0, 0, d λ, 2 d (b·x) (docs/conventions.md §2); the mixing rotation
/// is divergence-free and the normal special one has 2 d y.
fn divergence_by_hand(m: &Model, family: &str, x: &[f64]) -> f64 {
    let d = m.d;
    let df = d as f64;
    let dot_with = |name: &str| -> f64 { (0..d).map(|k| m.tensor(name, &[k]) * x[k]).sum() };
    match family {
        "tr" | "rot" | "ntr" | "mix" => 0.0,
        "dil" => df * m.scalars["lambda"],
        "sct" => 2.0 * df * dot_with("b"),
        "psct" => 2.0 * df * dot_with("c"),
        "nsct" => 2.0 * df * x[d - 1],
        _ => unreachable!(),
    }
}

/// ∂_μ ε_ν by hand (differentiating the formulas of docs/conventions.md §2; common
/// practice): 0, ω_νμ, λ δ_μν, 2 b_μ x_ν + 2 (b·x) δ_μν - 2 x_μ b_ν.
fn jacobian_by_hand(m: &Model, family: &str, x: &[f64], mu: usize, nu: usize) -> f64 {
    let d = m.d;
    let kron = |i: usize, j: usize| f64::from(u8::from(i == j));
    let vec = |name: &str| -> Vec<f64> { (0..d).map(|k| m.tensor(name, &[k])).collect() };
    let normal: Vec<f64> = (0..d).map(|k| kron(k, d - 1)).collect();
    let special = |b: &[f64]| {
        let bx: f64 = b.iter().zip(x).map(|(p, q)| p * q).sum();
        2.0 * b[mu] * x[nu] + 2.0 * bx * kron(mu, nu) - 2.0 * x[mu] * b[nu]
    };
    match family {
        "tr" | "ntr" => 0.0,
        "rot" => m.tensor("omega", &[nu, mu]),
        "dil" => m.scalars["lambda"] * kron(mu, nu),
        "sct" => special(&vec("b")),
        "psct" => special(&vec("c")),
        "mix" => normal[nu] * vec("f")[mu] - vec("f")[nu] * normal[mu],
        "nsct" => special(&normal),
        _ => unreachable!(),
    }
}

fn killing_vectors(d: usize, seed: u64) {
    let families = ["tr", "rot", "dil", "sct", "psct", "ntr", "mix", "nsct"];
    let mut text = String::from(
        "dimension d\nhalfspace y >= 0\npoints x\n\
         killing tr translation a\nkilling rot rotation omega\n\
         killing dil dilatation lambda\nkilling sct special b\n\
         killing psct special c parallel\nkilling ntr translation n\n\
         killing mix rotation n f\nkilling nsct special n\n",
    );
    for f in families {
        text += &format!(
            "simplify {f}[mu](x)\nsimplify ∂[k](x) {{ {f}[k](x) }}\nsimplify ∂[mu](x) {{ {f}[nu](x) }}\n\
             simplify ∂[mu](x) {{ {f}[nu](x) }} + ∂[nu](x) {{ {f}[mu](x) }} - 2/d δ[mu,nu] ∂[k](x) {{ {f}[k](x) }}\n"
        );
    }
    let (ctx, cases) = simplify_all(&text);
    assert_eq!(cases.len(), 4 * families.len());
    let mut rng = SplitMix64::new(seed);
    let mut worst: f64 = 0.0;
    for (f, four) in families.iter().zip(cases.chunks(4)) {
        let [eps, div, jac, killing_eq] = four else {
            unreachable!()
        };
        for _ in 0..SAMPLES {
            let model = Model::random(&ctx, d, &mut rng);
            let x = model.at("x");
            // The expansion: ε_μ(x) (docs/conventions.md §2).
            let by_hand: Vec<f64> = (0..d)
                .map(|mu| killing_by_hand(&model, f, &x, mu))
                .collect();
            let engine = values(&model, &eps.output, &["mu".to_string()]);
            let size = max_abs(&by_hand);
            let err = rel_error(&engine, &by_hand, size);
            assert!(
                err < TOL,
                "d = {d}: {}: {engine:?} vs {by_hand:?}",
                eps.printed
            );
            worst = worst.max(err);
            // The Jacobian ∂_μ ε_ν, engine and oracle against the formula
            // (docs/conventions.md §2 differentiated by hand; common practice).
            let mut by_hand_jac = Vec::new();
            for mu in 0..d {
                for nu in 0..d {
                    by_hand_jac.push(jacobian_by_hand(&model, f, &x, mu, nu));
                }
            }
            let free = vec!["mu".to_string(), "nu".to_string()];
            let jac_engine = values(&model, &jac.output, &free);
            let jac_oracle = values(&model, &jac.input, &free);
            // Measured against the size of ε and its Jacobian, since both
            // vanish for a translation.
            let jac_size = max_abs(&by_hand_jac).max(size);
            for (what, got) in [("engine", &jac_engine), ("oracle", &jac_oracle)] {
                let err = rel_error(got, &by_hand_jac, jac_size);
                assert!(
                    err < TOL,
                    "d = {d}: {} ({what}): {got:?} vs {by_hand_jac:?}",
                    jac.printed
                );
                worst = worst.max(err);
            }
            // The divergence: d λ, 2 d (b·x), … (docs/conventions.md §2).
            let want = [divergence_by_hand(&model, f, &x)];
            for (what, t) in [("engine", &div.output), ("oracle", &div.input)] {
                let got = values(&model, t, &[]);
                let err = rel_error(&got, &want, jac_size);
                assert!(
                    err < TOL,
                    "d = {d}: {} ({what}): {got:?} vs {want:?}",
                    div.printed
                );
                worst = worst.max(err);
            }
            // The conformal Killing equation (docs/conventions.md §2): zero.
            let zero = vec![0.0; d * d];
            for (what, t) in [
                ("engine", &killing_eq.output),
                ("oracle", &killing_eq.input),
            ] {
                let got = values(&model, t, &free);
                let err = rel_error(&got, &zero, jac_size);
                assert!(
                    err < TOL,
                    "d = {d}: {} ({what}): {got:?}",
                    killing_eq.printed
                );
                worst = worst.max(err);
            }
        }
    }
    println!("killing vectors d = {d}: worst relative error {worst:.2e}");
}

#[test]
fn killing_vectors_d3() {
    killing_vectors(3, 0xca1c_0304);
}

#[test]
fn killing_vectors_d4() {
    killing_vectors(4, 0xca1c_0404);
}

// ───────────────────────── 4. sifted integrals ─────────────────────────

fn sifted_integrals(d: usize, seed: u64) {
    // ∫_B δ(x - p) f(x) = f(p) for p inside B, 0 outside (common practice,
    // the definition of δ); the oracle sifts numerically and checks the
    // placement of x2 from the numbers.
    let text = format!(
        "dimension {d}\nscalar O dim Delta\nparameters r a\npoints x x1 x2\n\
         place x2 outside ball(x1, r)\n\
         simplify ∫[x in ball(x1, r)] {{ δ(x - x1) |x - x2|^(-2) }}\n\
         simplify ∫[x in ball(x1, r)] {{ δ(x - x1) |x - x2|^(-2) <O(x1) O(x2)> }}\n\
         simplify ∫[x in ball(x1, r)] {{ δ(x - x1) |x - x2|^a x[mu] ∂[mu](x1) <O(x1) O(x2)> }}\n\
         simplify ∫[x in ball(x1, r)] {{ δ(x - x1) ∂[mu](x) {{ |x - x2|^a }} x2[mu] }}\n\
         simplify ∫[x in ball(x1, r)] {{ δ(x - x2) |x - x1|^a <O(x1) O(x2)> }}\n\
         simplify ∂[nu](x1) {{ ∫[x in space] {{ δ(x - x1) |x - x2|^a x[nu] }} }}\n"
    );
    let (ctx, cases) = simplify_all(&text);
    assert!(cases[4].output.is_zero(), "{}", cases[4].printed);
    let mut rng = SplitMix64::new(seed);
    // The radius puts x2 outside the ball, as the file declares.
    let radius = |m: &mut Model, rng: &mut SplitMix64| {
        let (x1, x2) = (m.at("x1"), m.at("x2"));
        let dist = x1
            .iter()
            .zip(&x2)
            .map(|(p, q)| (p - q) * (p - q))
            .sum::<f64>()
            .sqrt();
        m.set("r", dist * rng.uniform(0.2, 0.8));
        m.set("a", rng.uniform(-3.0, 3.0));
    };
    let mut worst: f64 = 0.0;
    for (k, case) in cases.iter().enumerate() {
        assert!(
            !format!("{:?}", case.output).contains("Integral"),
            "the integral was not sifted: {}",
            case.printed
        );
        // The integral outside: the oracle's value is zero, measured against
        // the size of the integrand at x2.
        let scale = |m: &Model| {
            (k == 4).then(|| {
                let integrand = Term::Mul(vec![
                    Term::Pow(
                        Box::new(Term::Dist(
                            ctx.point_term("x", false).expect("x"),
                            ctx.point_term("x1", false).expect("x1"),
                        )),
                        Box::new(Term::Sym("a".into())),
                    ),
                    case_correlator(&ctx),
                ]);
                let mut m2 = m.clone();
                m2.points.insert("x".into(), m.at("x2"));
                m2.eval(&integrand, &[]).abs()
            })
        };
        let err = agree(&ctx, d, case, &mut rng, &radius, &scale);
        println!("d = {d}: {err:.1e}  {}", case.input_text);
        worst = worst.max(err);
    }
    println!("sifted integrals d = {d}: worst relative error {worst:.2e}");
}

fn case_correlator(ctx: &Context) -> Term {
    Term::Corr(
        ["x1", "x2"]
            .iter()
            .map(|p| wardsmith::term::Op {
                point: ctx.point_term(p, false).expect("declared"),
                name: "O".into(),
                indices: vec![],
            })
            .collect(),
    )
}

#[test]
fn sifted_integrals_d3() {
    sifted_integrals(3, 0xca1c_0305);
}

#[test]
fn sifted_integrals_d4() {
    sifted_integrals(4, 0xca1c_0405);
}

// ───────────────────────── 5. the oracle itself ─────────────────────────

/// Forward-mode jets agree with sixth-order central differences (common
/// practice; step 2e-3 keeps truncation ~1e-15 and rounding ~1e-12 for
/// first derivatives, ~1e-10 for nested second ones) on inputs like those
/// of the tests above.
#[test]
fn oracle_agrees_with_central_differences() {
    let mut worst: f64 = 0.0;
    for d in [3, 4] {
        let text = format!(
            "dimension {d}\nhalfspace y >= 0\nparameters a b Delta\npoints x1 x2 x3\nfunction F\n\
             killing sct special e\n\
             simplify ∂[mu](x1) {{ |x1 - x2|^a |x1 - x3|^b }}\n\
             simplify ∂[mu](x2) {{ F(xi(x1, x2)) (x2[n])^(-Delta) }}\n\
             simplify ∂[mu](x1) {{ sct[nu](x1) |x1 - x3|^a }}\n\
             simplify ∂[mu](x1) ∂[nu](x2) {{ |x1 - x2|^a |x2 - x3|^b }}\n\
             simplify ∂[mu](x1) ∂[mu](x1) {{ F(xi(x1, x2)) (2 x1[n])^(-Delta) }}\n"
        );
        let (ctx, cases) = simplify_all(&text);
        let mut rng = SplitMix64::new(0xca1c_0006 + d as u64);
        for case in &cases {
            for f in [Unknown::ExpMinus, Unknown::PowerRatio] {
                let mut model = Model::random(&ctx, d, &mut rng);
                model.functions.insert("F".into(), f);
                model.set("a", rng.uniform(-3.0, 3.0));
                model.set("b", rng.uniform(-3.0, 3.0));
                let free = free_indices(&case.input);
                let jets = values(&model, &case.input, &free);
                model.mode = Differentiate::Differences(2e-3);
                let differences = values(&model, &case.input, &free);
                let err = rel_error(&differences, &jets, max_abs(&jets));
                assert!(err < TOL, "d = {d}: {}: {err:e}", case.printed);
                worst = worst.max(err);
            }
        }
    }
    println!("jets vs central differences: worst relative error {worst:.2e}");
}

/// The closed-form derivatives of the concrete F agree with central
/// differences of the lower derivative (common practice).
#[test]
fn closed_form_derivatives_of_the_unknown_functions() {
    let mut rng = SplitMix64::new(0xca1c_0007);
    let mut worst: f64 = 0.0;
    for f in [Unknown::ExpMinus, Unknown::PowerRatio] {
        for _ in 0..20 {
            let u = rng.uniform(0.1, 3.0);
            for k in 0..6 {
                let h = 1e-3;
                let g = |s: f64| f.derivative(k, u + s * h);
                let fd = (-g(-3.0) + 9.0 * g(-2.0) - 45.0 * g(-1.0) + 45.0 * g(1.0) - 9.0 * g(2.0)
                    + g(3.0))
                    / (60.0 * h);
                let exact = f.derivative(k + 1, u);
                let err = (fd - exact).abs() / exact.abs().max(f.derivative(k, u).abs());
                assert!(err < TOL, "{f:?}: F^({}) at {u}: {exact} vs {fd}", k + 1);
                worst = worst.max(err);
            }
        }
    }
    println!("closed-form F^(k): worst relative error {worst:.2e}");
}

// ───────────────────────── 6. not vacuous ─────────────────────────

/// The terms of a normal form; a product whose coefficient is a sum counts
/// each of its terms.
fn summands(t: &Term) -> Vec<Term> {
    match t {
        Term::Add(ts) => ts.clone(),
        Term::Mul(fs) => {
            let Some(k) = fs.iter().position(|f| matches!(f, Term::Add(_))) else {
                return vec![t.clone()];
            };
            let Term::Add(inner) = &fs[k] else {
                return vec![t.clone()];
            };
            inner
                .iter()
                .map(|a| {
                    let mut product = fs.clone();
                    product[k] = a.clone();
                    Term::Mul(product)
                })
                .collect()
        }
        t => vec![t.clone()],
    }
}

#[test]
fn perturbed_answers_fail() {
    // The smallest error a perturbation produced, and how many were tried.
    let mut weakest = f64::INFINITY;
    let mut tried = 0;
    for d in [3, 4] {
        let text = format!(
            "dimension {d}\nhalfspace y >= 0\nparameters a b Delta\npoints x1 x2 x3\nfunction F\n\
             killing sct special e\n\
             simplify ∂[mu](x1) {{ |x1 - x2|^a |x1 - x3|^b }}\n\
             simplify ∂[mu](x1) ∂[nu](x2) {{ |x1 - x2|^a |x2 - x3|^b }}\n\
             simplify ∂[mu](x1) {{ F(xi(x1, x2)) (x2[n])^(-Delta) }}\n\
             simplify ∂[mu](x2) ∂[mu](x2) {{ F(xi(x1, x2)) (2 x2[n])^(-Delta) }}\n\
             simplify sct[mu](x1)\n"
        );
        let (ctx, cases) = simplify_all(&text);
        let mut rng = SplitMix64::new(0xca1c_0008 + d as u64);
        for case in &cases {
            let terms = summands(&case.output);
            assert!(terms.len() >= 2, "{}", case.printed);
            let model = Model::random(&ctx, d, &mut rng);
            let unchanged = discrepancy(&model, &case.input, &case.output, None);
            assert!(unchanged < TOL, "{}: {unchanged:e}", case.printed);
            for k in 0..terms.len() {
                // One term times 1.001.
                let mut scaled = terms.clone();
                scaled[k] = Term::Mul(vec![
                    Term::Num(BigRational::new(1001.into(), 1000.into())),
                    scaled[k].clone(),
                ]);
                let err = discrepancy(&model, &case.input, &Term::Add(scaled), None);
                assert!(
                    err > TOL,
                    "scaling term {k} of {} by 1.001 went unnoticed: {err:e}",
                    case.printed
                );
                weakest = weakest.min(err);
                tried += 1;
                // One term dropped.
                let mut dropped = terms.clone();
                dropped.remove(k);
                let err = discrepancy(&model, &case.input, &Term::Add(dropped), None);
                assert!(
                    err > TOL,
                    "dropping term {k} of {} went unnoticed: {err:e}",
                    case.printed
                );
                weakest = weakest.min(err);
                tried += 1;
            }
        }
    }
    println!("{tried} perturbed answers all fail; smallest relative error {weakest:.2e}");
}
