//! The Gauss hypergeometric function as the language knows it, checked
//! with numbers at seeded random points:
//!
//! 1. the identities the normal form rests on (src/normal/hypergeometric.rs),
//!    with ₂F₁ from `numeric::special`: the derivative
//!    d/dz ₂F₁(a, b; c; z) = (ab/c) ₂F₁(a + 1, b + 1; c + 1; z) (DLMF 15.5.1)
//!    against a difference quotient, the differential equation
//!    z(1 - z) F'' + [c - (a + b + 1) z] F' - ab F = 0 (DLMF 15.10.1) and its
//!    k-th derivative (derived), and the step down
//!    F = [z(1 - z) G' + (c - (a + b + 1) z) G]/c, G = ₂F₁(a + 1, b + 1; c + 1; z)
//!    (derived);
//! 2. normal forms the engine writes (derivatives of order 2 and 3, shifted
//!    parameters, products) against the compiled input, which evaluates
//!    every ₂F₁^(k) directly;
//! 3. the blocks `f_bulk(Δ; ξ)` and `f_bdy(Δ̂; ξ)` of the language against
//!    `numeric::special::blocks` (docs/conventions.md §9), the unitarity
//!    bound of the boundary block included;
//! 4. the Casimir equations of both channels (docs/conventions.md §9) on
//!    `numeric::special::blocks`, with derivatives by five-point
//!    differences: an independent check of the operators the example
//!    `examples/wall-casimir.ward` proves symbolically.

use std::collections::BTreeMap;
use std::sync::Arc;

use wardsmith::context::Context;
use wardsmith::diagnostic::Source;
use wardsmith::egraph::Limits;
use wardsmith::engine::Engine;
use wardsmith::lower::{lower, ItemKind};
use wardsmith::numeric::eval::compile;
use wardsmith::numeric::special::{boundary_block, bulk_block, hyp2f1};
use wardsmith::numeric::Values;
use wardsmith::rules::RuleBook;
use wardsmith::syntax::parse_file;
use wardsmith::term::Term;

/// splitmix64 (Steele, Lea & Flood 2014): uniform in [0, 1).
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }

    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.next()
    }
}

/// The k-th z-derivative, (a)_k (b)_k/(c)_k ₂F₁(a + k, b + k; c + k; z).
fn hyp_k(a: f64, b: f64, c: f64, z: f64, k: u32) -> f64 {
    let mut factor = 1.0;
    for j in 0..k {
        let j = f64::from(j);
        factor *= (a + j) * (b + j) / (c + j);
    }
    let k = f64::from(k);
    factor * hyp2f1(a + k, b + k, c + k, z).unwrap()
}

/// Random generic parameters and a z on the real axis below 1.
fn parameters(rng: &mut Rng) -> (f64, f64, f64, f64) {
    let a = rng.range(0.1, 2.9);
    let b = rng.range(-1.4, 2.2);
    let c = rng.range(0.3, 3.7);
    let z = if rng.next() < 0.5 {
        rng.range(-6.0, 0.0)
    } else {
        rng.range(0.0, 0.9)
    };
    (a, b, c, z)
}

#[test]
fn the_derivative_is_the_shifted_function() {
    // DLMF 15.5.1 against a central difference (error h² F'''/6).
    let mut rng = Rng(11);
    for _ in 0..100 {
        let (a, b, c, z) = parameters(&mut rng);
        let h = 1e-4;
        let quotient =
            (hyp2f1(a, b, c, z + h).unwrap() - hyp2f1(a, b, c, z - h).unwrap()) / (2.0 * h);
        let formula = a * b / c * hyp2f1(a + 1.0, b + 1.0, c + 1.0, z).unwrap();
        let scale = formula.abs().max(hyp2f1(a, b, c, z).unwrap().abs());
        assert!(
            (quotient - formula).abs() <= 1e-6 * scale,
            "a = {a}, b = {b}, c = {c}, z = {z}: {quotient} against {formula}"
        );
    }
}

#[test]
fn the_differential_equation_and_its_derivatives_hold() {
    // z(1 - z) F^(k+2) + [c + k - (a + b + 2k + 1) z] F^(k+1) - (a + k)(b + k) F^(k) = 0:
    // DLMF 15.10.1 at k = 0, the equation of ₂F₁(a + k, b + k; c + k; z) times
    // (a)_k (b)_k/(c)_k for every k (derived).
    let mut rng = Rng(12);
    for _ in 0..100 {
        let (a, b, c, z) = parameters(&mut rng);
        for k in 0..4u32 {
            let kf = f64::from(k);
            let f = [
                hyp_k(a, b, c, z, k),
                hyp_k(a, b, c, z, k + 1),
                hyp_k(a, b, c, z, k + 2),
            ];
            let terms = [
                z * (1.0 - z) * f[2],
                (c + kf - (a + b + 2.0 * kf + 1.0) * z) * f[1],
                -(a + kf) * (b + kf) * f[0],
            ];
            let size: f64 = terms.iter().map(|t| t.abs()).sum();
            let sum: f64 = terms.iter().sum();
            assert!(
                sum.abs() <= 1e-11 * size,
                "k = {k}, a = {a}, b = {b}, c = {c}, z = {z}: residual {sum} of {size}"
            );
        }
    }
}

#[test]
fn a_function_is_written_in_the_one_above_it() {
    // ₂F₁(a, b; c; z) = [z(1 - z) G' + (c - (a + b + 1) z) G]/c with
    // G = ₂F₁(a + 1, b + 1; c + 1; z) (derived from the equation), and
    // ₂F₁^(k)(a + 1, b + 1; c + 1; z) = c/(ab) ₂F₁^(k+1)(a, b; c; z).
    let mut rng = Rng(13);
    for _ in 0..100 {
        let (a, b, c, z) = parameters(&mut rng);
        let f = hyp2f1(a, b, c, z).unwrap();
        let g = hyp_k(a + 1.0, b + 1.0, c + 1.0, z, 0);
        let g1 = hyp_k(a + 1.0, b + 1.0, c + 1.0, z, 1);
        let up = (z * (1.0 - z) * g1 + (c - (a + b + 1.0) * z) * g) / c;
        let size = (z * (1.0 - z) * g1).abs() + ((c - (a + b + 1.0) * z) * g).abs();
        assert!(
            (f - up).abs() <= 1e-12 * size.max(f.abs()) / c.abs().min(1.0),
            "{f} against {up}"
        );
        for k in 0..3 {
            let shifted = hyp_k(a + 1.0, b + 1.0, c + 1.0, z, k);
            let down = c / (a * b) * hyp_k(a, b, c, z, k + 1);
            assert!((shifted - down).abs() <= 1e-12 * shifted.abs().max(down.abs()));
        }
    }
}

// ───────────────────────── the engine's normal forms ─────────────────────────

struct Case {
    input: Term,
    output: Term,
}

fn simplify_all(text: &str) -> (Arc<Context>, Vec<Case>) {
    let source = Source::new("hypergeometric.ward", text);
    let file = parse_file(&source).unwrap_or_else(|e| panic!("{}", e.render()));
    let program = lower(&source, &file).unwrap_or_else(|e| panic!("{}", e.render()));
    let book = Arc::new(RuleBook::shipped().unwrap_or_else(|e| panic!("{}", e.render())));
    let engine = Engine::new(program.ctx.clone(), book, Limits::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    let cases = program
        .items
        .iter()
        .filter_map(|item| match &item.kind {
            ItemKind::Simplify { expr, .. } => Some(Case {
                input: expr.clone(),
                output: engine
                    .simplify(expr)
                    .unwrap_or_else(|e| panic!("{}", e.render()))
                    .term,
            }),
            _ => None,
        })
        .collect();
    (program.ctx.clone(), cases)
}

fn value(ctx: &Context, t: &Term, v: &Values) -> f64 {
    compile(ctx, t, &[], v.dim)
        .unwrap_or_else(|e| panic!("{}", e.render()))
        .eval(v)
        .unwrap_or_else(|e| panic!("{}", e.render()))
}

fn scalars(dim: usize, pairs: &[(&str, f64)]) -> Values {
    Values {
        dim,
        scalars: pairs.iter().map(|(k, x)| (k.to_string(), *x)).collect(),
        tensors: BTreeMap::new(),
        points: BTreeMap::new(),
    }
}

#[test]
fn normal_forms_agree_with_direct_evaluation() {
    let (ctx, cases) = simplify_all(
        "dimension 3
         parameters a b c z
         simplify F21''(a, b; c; z)
         simplify F21'''(a, b; c; z)
         simplify F21(a + 1, b + 1; c + 1; z)
         simplify F21'(a + 2, b + 2; c + 2; z)
         simplify F21(a - 1, b - 1; c - 1; z)
         simplify F21''(a - 2, b - 2; c - 2; z)
         simplify F21(a + 1, b + 1; c + 1; z) F21''(a, b; c; z) - F21'(a, b; c; z)^2
         simplify F21(a, b; c; 0) + F21'(a, b; c; 0) + F21(0, b; c; z)
         simplify z (1 - z) F21''(a, b; c; z) + (c - (a + b + 1) z) F21'(a, b; c; z) - a b F21(a, b; c; z)",
    );
    let mut rng = Rng(21);
    for (n, case) in cases.iter().enumerate() {
        for _ in 0..20 {
            // Away from whole parameters, so that every shifted c is a
            // regular point.
            let (a, b, c, z) = (
                rng.range(1.1, 3.3),
                rng.range(1.2, 2.8),
                rng.range(2.2, 4.4),
                rng.range(-3.0, 0.8),
            );
            let v = scalars(3, &[("a", a), ("b", b), ("c", c), ("z", z)]);
            let (left, right) = (value(&ctx, &case.input, &v), value(&ctx, &case.output, &v));
            assert!(
                (left - right).abs() <= 1e-9 * left.abs().max(right.abs()).max(1.0),
                "case {n} at a = {a}, b = {b}, c = {c}, z = {z}: input {left}, normal form {right}"
            );
        }
    }
    // The last one is the differential equation: zero exactly.
    assert!(cases.last().unwrap().output.is_zero());
}

#[test]
fn blocks_of_the_language_are_the_numeric_blocks() {
    let mut rng = Rng(31);
    for dim in [3usize, 4, 5] {
        let (ctx, cases) = simplify_all(&format!(
            "dimension {dim}
             positive Delta xi
             simplify f_bulk(Delta; xi)
             simplify f_bdy(Delta; xi)
             simplify f_bdy(d/2 - 1; xi)
             simplify f_bulk'(Delta; xi)
             simplify f_bdy''(Delta; xi)"
        ));
        let d = dim as f64;
        for _ in 0..20 {
            let (delta, xi) = (rng.range(0.6, 4.2), rng.range(0.05, 8.0));
            let v = scalars(dim, &[("Delta", delta), ("xi", xi)]);
            let got: Vec<f64> = cases.iter().map(|c| value(&ctx, &c.output, &v)).collect();
            let want = [
                bulk_block(d, delta, xi).unwrap(),
                boundary_block(d, delta, xi).unwrap(),
                boundary_block(d, d / 2.0 - 1.0, xi).unwrap(),
            ];
            for (k, w) in want.iter().enumerate() {
                assert!(
                    (got[k] - w).abs() <= 1e-12 * w.abs(),
                    "d = {d}, case {k}: {} against {w}",
                    got[k]
                );
            }
            // Derivatives in ξ against five-point differences.
            let h = 1e-3 * xi;
            let d1 = |f: &dyn Fn(f64) -> f64| {
                (f(xi - 2.0 * h) - 8.0 * f(xi - h) + 8.0 * f(xi + h) - f(xi + 2.0 * h)) / (12.0 * h)
            };
            let d2 = |f: &dyn Fn(f64) -> f64| {
                (-f(xi - 2.0 * h) + 16.0 * f(xi - h) - 30.0 * f(xi) + 16.0 * f(xi + h)
                    - f(xi + 2.0 * h))
                    / (12.0 * h * h)
            };
            let bulk = |x: f64| bulk_block(d, delta, x).unwrap();
            let bdy = |x: f64| boundary_block(d, delta, x).unwrap();
            let (w1, w2) = (d1(&bulk), d2(&bdy));
            assert!(
                (got[3] - w1).abs() <= 1e-7 * w1.abs().max(bulk(xi) / xi),
                "{} against {w1}",
                got[3]
            );
            assert!(
                (got[4] - w2).abs() <= 1e-5 * w2.abs().max(bdy(xi) / (xi * xi)),
                "{} against {w2}",
                got[4]
            );
        }
    }
}

#[test]
fn the_blocks_obey_their_casimir_equations() {
    // docs/conventions.md §9: with f_bulk = ξ^(Δ/2) ₂F₁(Δ/2, Δ/2; Δ + 1 - d/2; -ξ),
    //   4 ξ² (1 + ξ) f'' + 2 ξ (2 ξ + 2 - d) f' = Δ (Δ - d) f,
    // and with f_bdy = ξ^(-Δ̂) ₂F₁(Δ̂, Δ̂ + 1 - d/2; 2Δ̂ + 2 - d; -1/ξ),
    //   ξ (1 + ξ) f'' + (d/2)(2 ξ + 1) f' = Δ̂ (Δ̂ - d + 1) f.
    // Derivatives by five-point differences of the numeric blocks, any real d.
    let mut rng = Rng(41);
    for _ in 0..200 {
        let d = rng.range(2.2, 7.0);
        let delta = rng.range(0.3, 5.0);
        let xi = rng.range(0.05, 6.0);
        let h = 1e-3 * xi;
        let derivatives = |f: &dyn Fn(f64) -> f64| {
            let p = [
                f(xi - 2.0 * h),
                f(xi - h),
                f(xi),
                f(xi + h),
                f(xi + 2.0 * h),
            ];
            let d1 = (p[0] - 8.0 * p[1] + 8.0 * p[3] - p[4]) / (12.0 * h);
            let d2 = (-p[0] + 16.0 * p[1] - 30.0 * p[2] + 16.0 * p[3] - p[4]) / (12.0 * h * h);
            (p[2], d1, d2)
        };
        let (f, f1, f2) = derivatives(&|x| bulk_block(d, delta, x).unwrap());
        let terms = [
            4.0 * xi * xi * (1.0 + xi) * f2,
            2.0 * xi * (2.0 * xi + 2.0 - d) * f1,
            -delta * (delta - d) * f,
        ];
        let size: f64 = terms.iter().map(|t| t.abs()).sum();
        let sum: f64 = terms.iter().sum();
        assert!(
            sum.abs() <= 1e-6 * size,
            "bulk: d = {d}, Δ = {delta}, ξ = {xi}: {sum} of {size}"
        );
        let (f, f1, f2) = derivatives(&|x| boundary_block(d, delta, x).unwrap());
        let terms = [
            xi * (1.0 + xi) * f2,
            d / 2.0 * (2.0 * xi + 1.0) * f1,
            -delta * (delta - d + 1.0) * f,
        ];
        let size: f64 = terms.iter().map(|t| t.abs()).sum();
        let sum: f64 = terms.iter().sum();
        assert!(
            sum.abs() <= 1e-6 * size,
            "boundary: d = {d}, Δ̂ = {delta}, ξ = {xi}: {sum} of {size}"
        );
    }
}
