//! Unit tests of the compiler and the interpreter: folding, sharing,
//! unrolled indices, the wall, the split for moving points, and every
//! error. Values are checked against formulas written out by hand here
//! (common practice); the end-to-end checks are in `tests/evaluation.rs`.

use std::collections::BTreeMap;
use std::sync::Arc;

use super::program::Op;
use super::{compile, Program};
use crate::context::Context;
use crate::diagnostic::{ErrorKind, Source};
use crate::lower::{lower, ItemKind};
use crate::normal::normalize;
use crate::numeric::Values;
use crate::syntax::parse_file;
use crate::term::{Index, Term};

/// The declarations of `text` and the normal form of each `simplify`.
fn terms(text: &str) -> (Arc<Context>, Vec<Term>) {
    let source = Source::new("eval.ward", text);
    let file = parse_file(&source).unwrap_or_else(|e| panic!("{}", e.render()));
    let program = lower(&source, &file).unwrap_or_else(|e| panic!("{}", e.render()));
    let ctx = program.ctx.clone();
    let out = program
        .items
        .iter()
        .filter_map(|item| match &item.kind {
            ItemKind::Simplify { expr, .. } => {
                Some(normalize(&ctx, expr).unwrap_or_else(|e| panic!("{}", e.render())))
            }
            _ => None,
        })
        .collect();
    (ctx, out)
}

fn values(dim: usize, points: &[(&str, Vec<f64>)], scalars: &[(&str, f64)]) -> Values {
    Values {
        dim,
        scalars: scalars.iter().map(|(k, v)| (k.to_string(), *v)).collect(),
        tensors: BTreeMap::new(),
        points: points
            .iter()
            .map(|(k, v)| (k.to_string(), v.clone()))
            .collect(),
    }
}

fn dist2(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| (x - y) * (x - y)).sum()
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-13 * a.abs().max(b.abs()).max(1e-300)
}

fn count(p: &Program, pred: impl Fn(&Op) -> bool) -> usize {
    p.code.iter().filter(|i| pred(&i.op)).count()
}

fn free(pairs: &[(&str, usize)]) -> Vec<(String, usize)> {
    pairs.iter().map(|(k, v)| (k.to_string(), *v)).collect()
}

const BULK: &str = "dimension 3\nparameters Delta\npoints x1 x2 x3\n";

#[test]
fn numbers_and_the_dimension_fold() {
    let (ctx, ts) = terms("dimension d\npoints x\nsimplify 3/2 d + δ[mu,mu]\n");
    let p = compile(&ctx, &ts[0], &[], 5).unwrap();
    assert!(p.is_empty());
    assert_eq!(p.eval(&values(5, &[], &[])).unwrap(), 7.5 + 5.0);
}

#[test]
fn a_power_of_a_distance_matches_the_formula() {
    let (ctx, ts) = terms(&format!("{BULK}simplify |x1 - x2|^(-2 Delta)\n"));
    let p = compile(&ctx, &ts[0], &[], 3).unwrap();
    let (x1, x2) = (vec![0.1, -0.4, 0.9], vec![0.7, 0.2, -0.3]);
    let v = values(
        3,
        &[("x1", x1.clone()), ("x2", x2.clone())],
        &[("Delta", 1.37)],
    );
    let expect = dist2(&x1, &x2).sqrt().powf(-2.0 * 1.37);
    assert!(close(p.eval(&v).unwrap(), expect));
    // One distance, one power: (r²)^(-Δ).
    assert_eq!(count(&p, |o| matches!(o, Op::Dist2 { .. })), 1);
    assert_eq!(count(&p, |o| matches!(o, Op::Pow(..))), 1);
}

#[test]
fn distances_and_powers_are_computed_once() {
    // The derivative of a three-point function has the same distances in
    // every term, and powers of each that differ by whole numbers.
    let (ctx, ts) = terms(&format!(
        "{BULK}simplify ∂[mu](x1) {{ |x1 - x2|^(-13/10) |x1 - x3|^(-19/10) |x2 - x3|^(-7/2) }}\n"
    ));
    let p = compile(&ctx, &ts[0], &free(&[("mu", 1)]), 3).unwrap();
    assert_eq!(count(&p, |o| matches!(o, Op::Dist2 { .. })), 3);
    // One powf per distance with an exponent that is not a multiple of
    // 1/2; the others are whole powers times it; and |x2 - x3|^(-7/2) =
    // (|x2 - x3|²)^(-2) · ⁴√(|x2 - x3|²) takes two square roots.
    assert_eq!(count(&p, |o| matches!(o, Op::Pow(..))), 2);
    assert_eq!(count(&p, |o| matches!(o, Op::Sqrt(..))), 2);
    let (x1, x2, x3) = (
        vec![0.3, 0.1, -0.2],
        vec![-0.5, 0.8, 0.4],
        vec![0.9, -0.7, 0.6],
    );
    let v = values(
        3,
        &[("x1", x1.clone()), ("x2", x2.clone()), ("x3", x3.clone())],
        &[],
    );
    let (r12, r13, r23) = (dist2(&x1, &x2), dist2(&x1, &x3), dist2(&x2, &x3));
    let g = r12.powf(-0.65) * r13.powf(-0.95) * r23.powf(-1.75);
    let expect = g * (-1.3 * (x1[1] - x2[1]) / r12 - 1.9 * (x1[1] - x3[1]) / r13);
    let got = p.eval(&v).unwrap();
    assert!(close(got, expect), "{got} vs {expect}");
}

#[test]
fn summed_indices_are_unrolled() {
    let (ctx, ts) = terms(
        "dimension d\nhalfspace y >= 0\npoints x1 x2\nparallel a\n\
         simplify x1[k] x2[k]\nsimplify x1[a] x1[a]\nsimplify δ[a,a] + δ[k,k]\n\
         simplify x1[k] x1[k] x2[m] x2[m]\n",
    );
    let (x1, x2) = (vec![0.3, -0.1, 0.5, 1.2], vec![0.4, 0.6, -0.7, 0.2]);
    let v = values(4, &[("x1", x1.clone()), ("x2", x2.clone())], &[]);
    let dot: f64 = x1.iter().zip(&x2).map(|(a, b)| a * b).sum();
    let eval = |t: &Term| compile(&ctx, t, &[], 4).unwrap().eval(&v).unwrap();
    assert!(close(eval(&ts[0]), dot));
    let par: f64 = x1[..3].iter().map(|a| a * a).sum();
    assert!(close(eval(&ts[1]), par));
    assert_eq!(eval(&ts[2]), 7.0);
    let sq = |x: &[f64]| x.iter().map(|a| a * a).sum::<f64>();
    assert!(close(eval(&ts[3]), sq(&x1) * sq(&x2)));
}

#[test]
fn free_indices_take_their_values() {
    let (ctx, ts) = terms("dimension 3\nhalfspace y >= 0\npoints x1\nsimplify x1[mu] n[nu]\n");
    let x1 = vec![0.3, -0.1, 0.5];
    let v = values(3, &[("x1", x1.clone())], &[]);
    for (mu, x) in x1.iter().enumerate() {
        for nu in 0..3 {
            let p = compile(&ctx, &ts[0], &free(&[("mu", mu), ("nu", nu)]), 3).unwrap();
            let expect = if nu == 2 { *x } else { 0.0 };
            assert_eq!(p.eval(&v).unwrap(), expect);
        }
    }
}

#[test]
fn parameter_tensors_are_read_row_major() {
    let (ctx, ts) = terms(
        "dimension 3\npoints x\nkilling rot rotation omega\nkilling tr translation b\n\
         simplify omega[mu,k] x[k] + b[mu]\n",
    );
    let mut v = values(3, &[("x", vec![0.2, -0.4, 0.8])], &[]);
    let w = [[0.0, 0.5, -0.25], [-0.5, 0.0, 1.5], [0.25, -1.5, 0.0]];
    v.tensors
        .insert("omega".into(), w.iter().flatten().copied().collect());
    v.tensors.insert("b".into(), vec![1.0, 2.0, 3.0]);
    for mu in 0..3 {
        let p = compile(&ctx, &ts[0], &free(&[("mu", mu)]), 3).unwrap();
        let expect = (0..3).map(|k| w[mu][k] * v.points["x"][k]).sum::<f64>() + [1.0, 2.0, 3.0][mu];
        assert!(close(p.eval(&v).unwrap(), expect));
    }
    // The declaration promises antisymmetry; values without it are refused.
    v.tensors.get_mut("omega").unwrap()[1] = 0.6;
    let p = compile(&ctx, &ts[0], &free(&[("mu", 0)]), 3).unwrap();
    let e = p.eval(&v).unwrap_err();
    assert_eq!(e.kind, ErrorKind::Numeric);
    assert!(e.message.contains("antisymmetric"), "{}", e.message);
}

#[test]
fn the_wall_and_projections() {
    let (ctx, ts) = terms(
        "dimension 3\nhalfspace y >= 0\npoints x1\nboundary points s1\n\
         simplify |x1 - s1|^2\nsimplify |x1∥ - x1|\nsimplify s1[n] + x1[n]\n",
    );
    let x1 = vec![0.3, -0.1, 0.5];
    // A boundary point's normal coordinate is 0 whatever the values say.
    let v = values(3, &[("x1", x1.clone()), ("s1", vec![0.7, 0.2, 9.0])], &[]);
    let eval = |t: &Term| compile(&ctx, t, &[], 3).unwrap().eval(&v).unwrap();
    assert!(close(eval(&ts[0]), dist2(&x1, &[0.7, 0.2, 0.0])));
    assert!(close(eval(&ts[1]), 0.5));
    assert!(close(eval(&ts[2]), 0.5));
}

#[test]
fn eval_many_agrees_with_eval_and_hoists_the_rest() {
    let (ctx, ts) = terms(&format!(
        "{BULK}simplify ∂[mu](x1) ∂[mu](x1) {{ |x1 - x2|^(-2 Delta) |x1 - x3|^(-1/2) |x2 - x3|^(3/2) }}\n"
    ));
    let p = compile(&ctx, &ts[0], &[], 3).unwrap();
    let mut v = values(
        3,
        &[("x2", vec![0.5, 0.1, -0.2]), ("x3", vec![-0.3, 0.7, 0.4])],
        &[("Delta", 0.83)],
    );
    let coords: Vec<Vec<f64>> = (0..20)
        .map(|k| {
            let t = k as f64 / 20.0;
            vec![1.0 + t, -0.5 * t, 0.3 - t * t]
        })
        .collect();
    let many = p.eval_many(&v, "x1", &coords).unwrap();
    for (c, m) in coords.iter().zip(&many) {
        v.points.insert("x1".into(), c.clone());
        assert_eq!(p.eval(&v).unwrap(), *m);
    }
    let split = &p.moving["x1"];
    assert!(!split.invariant.is_empty() && !split.variant.is_empty());
    assert_eq!(split.invariant.len() + split.variant.len(), p.len());
    // A point the value does not depend on: a constant.
    let (ctx2, ts2) = terms("dimension 3\npoints x1 x2 x3\nsimplify |x2 - x3|\n");
    let q = compile(&ctx2, &ts2[0], &[], 3).unwrap();
    let flat = q.eval_many(&v, "x1", &coords[..3]).unwrap();
    assert_eq!(flat, vec![q.eval(&v).unwrap(); 3]);
}

#[test]
fn what_is_left_unevaluated_is_named() {
    let (ctx, ts) = terms(
        "dimension 3\nhalfspace y >= 0\nscalar O dim 2\npoints x1 x2\nfunction F\n\
         simplify |x1 - x2| <O(x1) O(x2)>\nsimplify δ(x1 - x2) + 1\nsimplify δ(y(x1))\n\
         simplify F(xi(x1, x2))\n",
    );
    for (t, what) in ts
        .iter()
        .zip(["correlator", "δ-function", "δ-function", "unknown function"])
    {
        let e = compile(&ctx, t, &[], 3).unwrap_err();
        assert_eq!(e.kind, ErrorKind::Numeric);
        assert!(e.message.contains(what), "{}", e.message);
        assert!(e.message.contains("left unevaluated"), "{}", e.message);
    }
    let p1 = ctx.point_term("x1", false).unwrap();
    let der = Term::Der(
        Index::N,
        p1.clone(),
        Box::new(Term::Dist(p1, ctx.point_term("x2", false).unwrap())),
    );
    let e = compile(&ctx, &der, &[], 3).unwrap_err();
    assert!(e.message.contains("derivative"), "{}", e.message);
}

#[test]
fn index_errors() {
    let (ctx, ts) = terms(
        "dimension 3\nhalfspace y >= 0\npoints x1\nparallel a\nsimplify x1[mu]\nsimplify x1[a]\n",
    );
    let e = compile(&ctx, &ts[0], &[], 3).unwrap_err();
    assert_eq!(e.kind, ErrorKind::Index);
    assert!(e.message.contains("mu"), "{}", e.message);
    assert!(compile(&ctx, &ts[0], &free(&[("mu", 3)]), 3).is_err());
    assert!(compile(&ctx, &ts[1], &free(&[("a", 2)]), 3).is_err());
    assert!(compile(&ctx, &ts[1], &free(&[("a", 1)]), 3).is_ok());
    // A declared dimension must match.
    assert!(compile(&ctx, &ts[1], &free(&[("a", 1)]), 4).is_err());
    assert!(compile(&ctx, &ts[1], &free(&[("a", 1)]), 0).is_err());
}

#[test]
fn missing_values_are_errors() {
    let (ctx, ts) = terms(&format!("{BULK}simplify |x1 - x2|^(-2 Delta)\n"));
    let p = compile(&ctx, &ts[0], &[], 3).unwrap();
    let x = vec![0.1, 0.2, 0.3];
    let y = vec![0.5, 0.2, 0.3];
    let e = p
        .eval(&values(3, &[("x1", x.clone()), ("x2", y.clone())], &[]))
        .unwrap_err();
    assert!(e.message.contains("Delta"), "{}", e.message);
    let e = p
        .eval(&values(3, &[("x1", x.clone())], &[("Delta", 1.0)]))
        .unwrap_err();
    assert!(e.message.contains("x2"), "{}", e.message);
    let e = p
        .eval(&values(
            4,
            &[("x1", x.clone()), ("x2", y.clone())],
            &[("Delta", 1.0)],
        ))
        .unwrap_err();
    assert!(e.message.contains("dimension"), "{}", e.message);
    let v = values(3, &[("x2", y.clone())], &[("Delta", 1.0)]);
    assert!(p.eval_many(&v, "x1", &[vec![0.0, 1.0]]).is_err());
    assert!(p.eval_many(&v, "x1", &[vec![0.0, f64::NAN, 1.0]]).is_err());
    assert!(p.eval_many(&v, "x9", std::slice::from_ref(&x)).is_err());
    assert_eq!(p.eval_many(&v, "x1", &[]).unwrap(), Vec::<f64>::new());
}

#[test]
fn arithmetic_without_a_real_value_is_an_error() {
    // 1/|x1 - x1|: zero by construction, refused when compiling.
    let (ctx, ts) = terms(
        "dimension 3\nhalfspace y >= 0\nparameters Delta\npoints x1 x2\n\
         simplify 1/|x1 - x2|\nsimplify (x1[n])^(1/3)\nsimplify (x1[n])^Delta\nsimplify |x1 - x2|^(-3/2)\n",
    );
    let x1 = ctx.point_term("x1", false).unwrap();
    let zero = Term::Pow(
        Box::new(Term::Dist(x1.clone(), x1.clone())),
        Box::new(Term::int(-1)),
    );
    let e = compile(&ctx, &zero, &[], 3).unwrap_err();
    assert_eq!(e.kind, ErrorKind::Numeric);
    assert!(e.message.contains("division by zero"), "{}", e.message);
    // At coincident points, when evaluating.
    let same = vec![0.1, 0.2, 0.3];
    let v = values(
        3,
        &[("x1", same.clone()), ("x2", same.clone())],
        &[("Delta", 0.5)],
    );
    for t in [&ts[0], &ts[3]] {
        let e = compile(&ctx, t, &[], 3).unwrap().eval(&v).unwrap_err();
        assert_eq!(e.kind, ErrorKind::Numeric);
        assert!(e.message.contains("division by zero"), "{}", e.message);
    }
    // A negative base to a power that is not whole.
    let v = values(3, &[("x1", vec![0.2, 0.3, -0.5])], &[("Delta", 0.5)]);
    for t in [&ts[1], &ts[2]] {
        let e = compile(&ctx, t, &[], 3).unwrap().eval(&v).unwrap_err();
        assert!(e.message.contains("not real"), "{}", e.message);
    }
    // A whole power of a negative number is fine.
    let v = values(3, &[("x1", vec![0.2, 0.3, -0.5])], &[("Delta", 3.0)]);
    assert!(close(
        compile(&ctx, &ts[2], &[], 3).unwrap().eval(&v).unwrap(),
        -0.125
    ));
    // The error names the sample.
    let p = compile(&ctx, &ts[0], &[], 3).unwrap();
    let v = values(3, &[("x2", same.clone())], &[]);
    let e = p
        .eval_many(&v, "x1", &[vec![1.0, 0.0, 0.0], same.clone()])
        .unwrap_err();
    assert!(
        e.notes.iter().any(|n| n.contains("sample 1")),
        "{:?}",
        e.notes
    );
}

#[test]
fn overflow_is_an_error() {
    let (ctx, ts) = terms("dimension 3\npoints x1 x2\nsimplify |x1 - x2|^(-400)\n");
    let p = compile(&ctx, &ts[0], &[], 3).unwrap();
    let v = values(
        3,
        &[("x1", vec![0.0; 3]), ("x2", vec![0.01, 0.0, 0.0])],
        &[],
    );
    let e = p.eval(&v).unwrap_err();
    assert!(e.message.contains("inf"), "{}", e.message);
}

#[test]
fn exponents_from_parameters_and_rationals() {
    // Exponents that fold to numbers through d, and half-integers.
    let (ctx, ts) =
        terms("dimension d\npoints x1 x2\nsimplify |x1 - x2|^(2 - d)\nsimplify |x1 - x2|^(5/2)\n");
    let (x1, x2) = (
        vec![0.1, 0.2, 0.3, 0.4, 0.5],
        vec![-0.3, 0.9, 0.1, 0.0, 0.2],
    );
    let v = values(5, &[("x1", x1.clone()), ("x2", x2.clone())], &[]);
    let r = dist2(&x1, &x2).sqrt();
    let p = compile(&ctx, &ts[0], &[], 5).unwrap();
    assert!(close(p.eval(&v).unwrap(), r.powi(-3)));
    assert_eq!(count(&p, |o| matches!(o, Op::Pow(..))), 0);
    let p = compile(&ctx, &ts[1], &[], 5).unwrap();
    assert!(close(p.eval(&v).unwrap(), r.powf(2.5)));
    assert_eq!(count(&p, |o| matches!(o, Op::Pow(..))), 0);
}
