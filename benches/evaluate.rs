//! Benchmark of compiled evaluation against the same formula written by
//! hand: ∂_μ^{(1)} of a scalar three-point function with numeric
//! dimensions, |x12|^(-19/10) |x13|^(-13/10) |x23|^(-23/10), at μ = 0 in
//! d = 4, at 10^4 positions of x1 (the quadrature loop).
//!
//! - `compiled_eval_many`: the engine's normal form, compiled once,
//!   evaluated by `Program::eval_many`.
//! - `hand_written`: the derivative written out in Rust,
//!   G · (-19/10 (x1 - x2)_μ/|x12|² - 13/10 (x1 - x3)_μ/|x13|²), every
//!   distance recomputed at each point.
//! - `compiled_eval_each`: `Program::eval` once per point (loading the
//!   values each time), for comparison.
//! - `compiled_batch`: `Program::batch` (the quadrature path), x1 moving
//!   over blocks of nodes, each instruction run across a block.
//! - `*_moving_x2`: the same with x2 moved instead of x1 (at x1 = 0), where
//!   less of the program is invariant: only |x13|.
//!
//! Run with `cargo bench --bench evaluate`. The size of the program and the
//! agreement of the two sides are printed once before timing. Target (the
//! design's performance goals): the compiled program within 3× of the hand-
//! written formula.

use std::collections::BTreeMap;
use std::sync::Arc;

use divan::black_box;
use wardsmith::diagnostic::Source;
use wardsmith::egraph::Limits;
use wardsmith::engine::Engine;
use wardsmith::lower::{lower, ItemKind};
use wardsmith::numeric::eval::{compile, Program};
use wardsmith::numeric::Values;
use wardsmith::rules::RuleBook;
use wardsmith::syntax::parse_file;

const POINTS: usize = 10_000;

const TEXT: &str = "dimension 4\npoints x1 x2 x3\n\
    simplify ∂[mu](x1) { |x1 - x2|^(-19/10) |x1 - x3|^(-13/10) |x2 - x3|^(-23/10) }\n";

fn main() {
    let (program, values, coords) = setup();
    let compiled = program
        .eval_many(&values, "x1", &coords)
        .expect("evaluates");
    let worst = coords
        .iter()
        .zip(&compiled)
        .map(|(x1, c)| {
            let h = by_hand(x1, &values.points["x2"], &values.points["x3"], 0);
            (c - h).abs() / h.abs()
        })
        .fold(0.0, f64::max);
    let batch = program.batch(&values, "x1", None).expect("loads");
    let mut batched = vec![0.0; coords.len()];
    batch
        .eval(&coords.concat(), &[], &mut batched)
        .expect("evaluates");
    let same = batched == compiled;
    eprintln!(
        "{} instructions; compiled vs hand-written: worst relative difference {worst:.1e}; \
         batched equal to eval_many bit for bit: {same}",
        program.len()
    );
    divan::main();
}

/// The compiled normal form, values for x2 and x3, and positions for x1.
fn setup() -> (Program, Values, Vec<Vec<f64>>) {
    let source = Source::new("evaluate.ward", TEXT);
    let lowered = lower(&source, &parse_file(&source).expect("parses")).expect("lowers");
    let engine = Engine::new(
        lowered.ctx.clone(),
        Arc::new(RuleBook::shipped().expect("shipped rules load")),
        Limits::default(),
    )
    .expect("engine");
    let ItemKind::Simplify { expr, .. } = &lowered.items[0].kind else {
        unreachable!("one simplify statement")
    };
    let term = engine.simplify(expr).expect("simplifies").term;
    let program = compile(&lowered.ctx, &term, &[("mu".to_string(), 0)], 4).expect("compiles");
    let values = Values {
        dim: 4,
        scalars: BTreeMap::new(),
        tensors: BTreeMap::new(),
        points: BTreeMap::from([
            ("x2".to_string(), vec![0.5, -0.25, 0.75, 0.125]),
            ("x3".to_string(), vec![-0.5, 0.5, -0.25, 1.0]),
        ]),
    };
    // Positions on a spiral around the origin, away from x2 and x3.
    let coords = (0..POINTS)
        .map(|k| {
            let t = k as f64 / POINTS as f64;
            let a = 40.0 * t;
            vec![
                2.0 + a.cos(),
                1.5 + a.sin(),
                -1.0 + t,
                0.5 * (3.0 * a).cos(),
            ]
        })
        .collect();
    (program, values, coords)
}

fn dist2(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| (x - y) * (x - y)).sum()
}

/// ∂_μ^{(1)} of |x12|^(-19/10) |x13|^(-13/10) |x23|^(-23/10), by hand.
#[inline(never)]
fn by_hand(x1: &[f64], x2: &[f64], x3: &[f64], mu: usize) -> f64 {
    let (r12, r13, r23) = (dist2(x1, x2), dist2(x1, x3), dist2(x2, x3));
    let g = r12.powf(-0.95) * r13.powf(-0.65) * r23.powf(-1.15);
    g * (-1.9 * (x1[mu] - x2[mu]) / r12 - 1.3 * (x1[mu] - x3[mu]) / r13)
}

#[divan::bench]
fn compiled_eval_many(bencher: divan::Bencher) {
    let (program, values, coords) = setup();
    bencher.bench(|| {
        program
            .eval_many(black_box(&values), "x1", black_box(&coords))
            .expect("evaluates")
    });
}

#[divan::bench]
fn hand_written(bencher: divan::Bencher) {
    let (_, values, coords) = setup();
    let (x2, x3) = (&values.points["x2"], &values.points["x3"]);
    bencher.bench(|| {
        black_box(&coords)
            .iter()
            .map(|x1| by_hand(x1, black_box(x2), black_box(x3), black_box(0)))
            .collect::<Vec<f64>>()
    });
}

#[divan::bench]
fn compiled_eval_each(bencher: divan::Bencher) {
    let (program, values, coords) = setup();
    bencher.bench(|| {
        let mut v = values.clone();
        black_box(&coords)
            .iter()
            .map(|x1| {
                v.points.insert("x1".to_string(), x1.clone());
                program.eval(&v).expect("evaluates")
            })
            .collect::<Vec<f64>>()
    });
}

#[divan::bench]
fn compiled_eval_many_moving_x2(bencher: divan::Bencher) {
    let (program, mut values, coords) = setup();
    values.points.insert("x1".to_string(), vec![0.0; 4]);
    bencher.bench(|| {
        program
            .eval_many(black_box(&values), "x2", black_box(&coords))
            .expect("evaluates")
    });
}

#[divan::bench]
fn hand_written_moving_x2(bencher: divan::Bencher) {
    let (_, values, coords) = setup();
    let (x1, x3) = (vec![0.0; 4], &values.points["x3"]);
    bencher.bench(|| {
        black_box(&coords)
            .iter()
            .map(|x2| by_hand(black_box(&x1), x2, black_box(x3), black_box(0)))
            .collect::<Vec<f64>>()
    });
}

/// `Program::batch` (the quadrature path): x1 moving over blocks of nodes,
/// the batch built inside the timing (once per integral in a file).
#[divan::bench]
fn compiled_batch(bencher: divan::Bencher) {
    let (program, values, coords) = setup();
    let flat: Vec<f64> = coords.concat();
    bencher.bench(|| {
        let batch = program
            .batch(black_box(&values), "x1", None)
            .expect("loads");
        let mut out = vec![0.0; POINTS];
        batch
            .eval(black_box(&flat), &[], &mut out)
            .expect("evaluates");
        out
    });
}

#[divan::bench]
fn compiled_batch_moving_x2(bencher: divan::Bencher) {
    let (program, mut values, coords) = setup();
    values.points.insert("x1".to_string(), vec![0.0; 4]);
    let flat: Vec<f64> = coords.concat();
    bencher.bench(|| {
        let batch = program
            .batch(black_box(&values), "x2", None)
            .expect("loads");
        let mut out = vec![0.0; POINTS];
        batch
            .eval(black_box(&flat), &[], &mut out)
            .expect("evaluates");
        out
    });
}
