//! Compiled evaluation (`wardsmith::numeric::eval`) end to end: `.ward`
//! text is parsed, lowered and simplified by the engine with the shipped
//! rules, the normal form is compiled, and its values are compared
//!
//! 1. with the same functions written out by hand in Rust, at seeded random
//!    points: |x1 - x2|^(-2Δ), a scalar three-point function, the special
//!    conformal Killing vector 2 (b·x) x_μ - x² b_μ, and the cross-ratio
//!    ξ = |x1 - x2|²/(4 y1 y2) next to a wall;
//! 2. for derivatives, with forward-mode hyper-dual numbers run on the
//!    undifferentiated input (so no symbolic rule is consulted), to 1e-12
//!    relative;
//! 3. and every input without a numeric value is an error, not a NaN.
//!
//! The formulas are common practice: ε_μ = 2 (b·x) x_μ - x² b_μ is the
//! special conformal Killing vector (docs/conventions.md §2), ξ the bulk two-point
//! cross-ratio (docs/conventions.md §7), |x_ij|^(Δk - Δi - Δj) the conformal
//! three-point structure.

use std::collections::BTreeMap;
use std::sync::Arc;

use num_traits::ToPrimitive;
use wardsmith::context::{Context, IndexKind};
use wardsmith::diagnostic::{ErrorKind, Source};
use wardsmith::egraph::Limits;
use wardsmith::engine::Engine;
use wardsmith::lower::{lower, ItemKind};
use wardsmith::numeric::eval::compile;
use wardsmith::numeric::Values;
use wardsmith::rules::RuleBook;
use wardsmith::syntax::parse_file;
use wardsmith::term::{Index, Point, Term};

/// Required agreement of derivatives (relative to the largest component).
const TOL: f64 = 1e-12;
/// Random configurations per check.
const SAMPLES: usize = 8;

// ───────────────────────── the library side ─────────────────────────

/// One `simplify` statement: the lowered input and the engine's output.
struct Case {
    input: Term,
    output: Term,
}

fn simplify_all(text: &str) -> (Arc<Context>, Vec<Case>) {
    let source = Source::new("evaluation.ward", text);
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

/// The compiled value of `t` with the free indices `free`.
fn compiled(ctx: &Context, t: &Term, free: &[(&str, usize)], v: &Values) -> f64 {
    let free: Vec<(String, usize)> = free.iter().map(|(k, x)| (k.to_string(), *x)).collect();
    compile(ctx, t, &free, v.dim)
        .unwrap_or_else(|e| panic!("{}", e.render()))
        .eval(v)
        .unwrap_or_else(|e| panic!("{}", e.render()))
}

// ───────────────────────── random configurations ─────────────────────────

/// splitmix64 (Steele, Lea & Flood 2014): a tiny, seeded, portable PRNG.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * ((self.next_u64() >> 11) as f64 / (1u64 << 53) as f64)
    }
}

/// Random values for the declarations of `ctx`: bulk points in the unit
/// cube (y in [0.3, 1.3] next to a wall), boundary points on the wall, at
/// least 0.4 apart; scalar parameters in [0.4, 1.6]; vector parameters in
/// [-1, 1]^d.
fn random(ctx: &Context, dim: usize, rng: &mut SplitMix64) -> Values {
    let mut points: BTreeMap<String, Vec<f64>> = BTreeMap::new();
    for p in &ctx.points {
        let x = loop {
            let mut x: Vec<f64> = (0..dim).map(|_| rng.uniform(-1.0, 1.0)).collect();
            if ctx.has_halfspace() {
                x[dim - 1] = if p.boundary {
                    0.0
                } else {
                    rng.uniform(0.3, 1.3)
                };
            }
            if points.values().all(|q| dist(&x, q) > 0.4) {
                break x;
            }
        };
        points.insert(p.name.clone(), x);
    }
    Values {
        dim,
        scalars: ctx
            .parameters
            .iter()
            .map(|s| (s.clone(), rng.uniform(0.4, 1.6)))
            .collect(),
        tensors: ctx
            .params
            .iter()
            .map(|(name, decl)| {
                assert_eq!(decl.rank, 1, "only vector parameters here");
                (
                    name.clone(),
                    (0..dim).map(|_| rng.uniform(-1.0, 1.0)).collect(),
                )
            })
            .collect(),
        points,
    }
}

fn dist(a: &[f64], b: &[f64]) -> f64 {
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y) * (x - y))
        .sum::<f64>()
        .sqrt()
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn rel(a: f64, b: f64, scale: f64) -> f64 {
    (a - b).abs() / scale
}

// ───────────────────────── 1. values against formulas ─────────────────────────

#[test]
fn distance_power_matches_the_formula() {
    let mut rng = SplitMix64(0xe7a1_0001);
    let mut worst: f64 = 0.0;
    for (dimension, dim) in [("3", 3), ("4", 4), ("d", 5)] {
        let (ctx, cases) = simplify_all(&format!(
            "dimension {dimension}\nparameters Delta\npoints x1 x2\nsimplify |x1 - x2|^(-2 Delta)\n"
        ));
        for _ in 0..SAMPLES {
            let mut v = random(&ctx, dim, &mut rng);
            v.scalars.insert("Delta".into(), rng.uniform(-2.5, 2.5));
            let (x1, x2, delta) = (&v.points["x1"], &v.points["x2"], v.scalars["Delta"]);
            let expect = dist(x1, x2).powf(-2.0 * delta);
            let got = compiled(&ctx, &cases[0].output, &[], &v);
            worst = worst.max(rel(got, expect, expect.abs()));
        }
    }
    println!("|x1 - x2|^(-2Δ): worst relative error {worst:.1e}");
    assert!(worst < 1e-14, "{worst:e}");
}

#[test]
fn three_point_function_matches_the_formula() {
    let (ctx, cases) = simplify_all(
        "dimension 4\nparameters D1 D2 D3\npoints x1 x2 x3\n\
         simplify |x1 - x2|^(D3 - D1 - D2) |x1 - x3|^(D2 - D1 - D3) |x2 - x3|^(D1 - D2 - D3)\n",
    );
    let mut rng = SplitMix64(0xe7a1_0002);
    let mut worst: f64 = 0.0;
    for _ in 0..SAMPLES {
        let v = random(&ctx, 4, &mut rng);
        let s = |k: &str| v.scalars[k];
        let p = |k: &str| v.points[k].as_slice();
        let (d1, d2, d3) = (s("D1"), s("D2"), s("D3"));
        let expect = dist(p("x1"), p("x2")).powf(d3 - d1 - d2)
            * dist(p("x1"), p("x3")).powf(d2 - d1 - d3)
            * dist(p("x2"), p("x3")).powf(d1 - d2 - d3);
        let got = compiled(&ctx, &cases[0].output, &[], &v);
        worst = worst.max(rel(got, expect, expect.abs()));
    }
    println!("three-point function: worst relative error {worst:.1e}");
    assert!(worst < 1e-14, "{worst:e}");
}

#[test]
fn special_conformal_killing_vector_matches_the_formula() {
    let (ctx, cases) =
        simplify_all("dimension d\npoints x1\nkilling eps special b\nsimplify eps[mu](x1)\n");
    let mut rng = SplitMix64(0xe7a1_0003);
    let mut worst: f64 = 0.0;
    for dim in [2, 3, 4, 6] {
        for _ in 0..SAMPLES {
            let v = random(&ctx, dim, &mut rng);
            let (x, b) = (&v.points["x1"], &v.tensors["b"]);
            let by_hand: Vec<f64> = (0..dim)
                .map(|mu| 2.0 * dot(b, x) * x[mu] - dot(x, x) * b[mu])
                .collect();
            let size = by_hand.iter().fold(0.0f64, |m, x| m.max(x.abs()));
            for (mu, expect) in by_hand.iter().enumerate() {
                let got = compiled(&ctx, &cases[0].output, &[("mu", mu)], &v);
                worst = worst.max(rel(got, *expect, size));
            }
        }
    }
    println!("2 (b·x) x_μ - x² b_μ: worst relative error {worst:.1e}");
    assert!(worst < 1e-14, "{worst:e}");
}

#[test]
fn cross_ratio_matches_the_formula_and_moves_with_eval_many() {
    let (ctx, cases) =
        simplify_all("dimension d\nhalfspace y >= 0\npoints x1 x2\nsimplify xi(x1, x2)\n");
    let mut rng = SplitMix64(0xe7a1_0004);
    let mut worst: f64 = 0.0;
    for dim in [3, 4] {
        let program = compile(&ctx, &cases[0].output, &[], dim).expect("compiles");
        for _ in 0..SAMPLES {
            let v = random(&ctx, dim, &mut rng);
            let xi =
                |x1: &[f64], x2: &[f64]| dist(x1, x2).powi(2) / (4.0 * x1[dim - 1] * x2[dim - 1]);
            let expect = xi(&v.points["x1"], &v.points["x2"]);
            worst = worst.max(rel(program.eval(&v).unwrap(), expect, expect));
            // The same with x1 moved through a cloud of positions.
            let cloud: Vec<Vec<f64>> = (0..50)
                .map(|_| random(&ctx, dim, &mut rng).points["x1"].clone())
                .collect();
            let many = program.eval_many(&v, "x1", &cloud).expect("evaluates");
            for (x1, got) in cloud.iter().zip(&many) {
                let expect = xi(x1, &v.points["x2"]);
                worst = worst.max(rel(*got, expect, expect));
            }
        }
    }
    println!("ξ: worst relative error {worst:.1e}");
    assert!(worst < 1e-14, "{worst:e}");
}

// ───────────────────────── 2. derivatives against dual numbers ─────────────────────────

/// a + b ε1 + c ε2 + e ε1ε2 with ε1² = ε2² = 0 (hyper-dual numbers; common
/// practice): seeding a coordinate with ε1 (and another with ε2) carries
/// the exact first (and mixed second) derivative through the arithmetic.
#[derive(Clone, Copy, Debug)]
struct Dual {
    a: f64,
    b: f64,
    c: f64,
    e: f64,
}

impl Dual {
    fn constant(a: f64) -> Dual {
        Dual {
            a,
            b: 0.0,
            c: 0.0,
            e: 0.0,
        }
    }

    fn add(self, o: Dual) -> Dual {
        Dual {
            a: self.a + o.a,
            b: self.b + o.b,
            c: self.c + o.c,
            e: self.e + o.e,
        }
    }

    fn mul(self, o: Dual) -> Dual {
        Dual {
            a: self.a * o.a,
            b: self.a * o.b + self.b * o.a,
            c: self.a * o.c + self.c * o.a,
            e: self.a * o.e + self.b * o.c + self.c * o.b + self.e * o.a,
        }
    }

    /// f(self) from f, f', f'' at the real part.
    fn apply(self, f: f64, f1: f64, f2: f64) -> Dual {
        Dual {
            a: f,
            b: f1 * self.b,
            c: f1 * self.c,
            e: f1 * self.e + f2 * self.b * self.c,
        }
    }

    /// self^p for a constant exponent.
    fn powf(self, p: f64) -> Dual {
        let x = self.a;
        assert!(x > 0.0 || p.fract() == 0.0, "{x}^{p}");
        self.apply(
            x.powf(p),
            p * x.powf(p - 1.0),
            p * (p - 1.0) * x.powf(p - 2.0),
        )
    }
}

/// The value of an explicit, undifferentiated input term with hyper-dual
/// coordinates; indices repeated within a product are summed.
struct DualEval<'a> {
    ctx: &'a Context,
    v: &'a Values,
    /// (point, axis, seed) for ε1 and ε2.
    seeds: Vec<(String, usize, usize)>,
}

impl DualEval<'_> {
    fn coordinate(&self, p: &Point, k: usize) -> Dual {
        let dim = self.v.dim;
        if k == dim - 1 && self.ctx.is_boundary_point(p) {
            return Dual::constant(0.0);
        }
        let mut x = Dual::constant(self.v.points[&*p.name][k]);
        for (name, axis, seed) in &self.seeds {
            if **name == *p.name && *axis == k {
                match seed {
                    1 => x.b += 1.0,
                    _ => x.c += 1.0,
                }
            }
        }
        x
    }

    fn index(&self, i: &Index, env: &BTreeMap<String, usize>) -> usize {
        match i {
            Index::N => self.v.dim - 1,
            Index::Named(s) => env[s],
        }
    }

    fn range(&self, name: &str) -> usize {
        match self.ctx.index_kind(name) {
            IndexKind::Bulk => self.v.dim,
            IndexKind::Parallel => self.v.dim - 1,
        }
    }

    fn eval(&self, t: &Term, env: &BTreeMap<String, usize>) -> Dual {
        match t {
            Term::Num(c) => Dual::constant(c.to_f64().expect("a number")),
            Term::Sym(s) if s == "d" => Dual::constant(self.v.dim as f64),
            Term::Sym(s) => Dual::constant(self.v.scalars[s]),
            Term::Add(ts) => ts
                .iter()
                .fold(Dual::constant(0.0), |acc, s| acc.add(self.eval(s, env))),
            Term::Mul(ts) => {
                // Indices occurring twice among the factors are summed.
                let mut counts: BTreeMap<String, usize> = BTreeMap::new();
                for f in ts {
                    for s in free(f) {
                        *counts.entry(s).or_insert(0) += 1;
                    }
                }
                let summed: Vec<String> = counts
                    .into_iter()
                    .filter(|(_, n)| *n == 2)
                    .map(|(s, _)| s)
                    .collect();
                self.sum(&summed, env, &|env| {
                    ts.iter()
                        .fold(Dual::constant(1.0), |acc, f| acc.mul(self.eval(f, env)))
                })
            }
            Term::Pow(a, b) => {
                let e = self.eval(b, env);
                assert!(e.b == 0.0 && e.c == 0.0, "a moving exponent");
                self.eval(a, env).powf(e.a)
            }
            Term::Dist(p, q) => {
                let mut s = Dual::constant(0.0);
                for k in 0..self.v.dim {
                    let d = self
                        .coordinate(p, k)
                        .add(self.coordinate(q, k).mul(Dual::constant(-1.0)));
                    s = s.add(d.mul(d));
                }
                s.powf(0.5)
            }
            Term::Comp(p, i) => self.coordinate(p, self.index(i, env)),
            Term::Param(name, idx) => {
                let k: Vec<usize> = idx.iter().map(|i| self.index(i, env)).collect();
                let flat = k.iter().fold(0, |acc, k| acc * self.v.dim + k);
                Dual::constant(self.v.tensors[name][flat])
            }
            Term::Kron(i, j) => Dual::constant(f64::from(u8::from(
                self.index(i, env) == self.index(j, env),
            ))),
            Term::Normal(i) => {
                Dual::constant(f64::from(u8::from(self.index(i, env) == self.v.dim - 1)))
            }
            other => panic!("not an explicit function: {other:?}"),
        }
    }

    fn sum(
        &self,
        names: &[String],
        env: &BTreeMap<String, usize>,
        f: &dyn Fn(&BTreeMap<String, usize>) -> Dual,
    ) -> Dual {
        let Some((first, rest)) = names.split_first() else {
            return f(env);
        };
        (0..self.range(first)).fold(Dual::constant(0.0), |acc, k| {
            let mut inner = env.clone();
            inner.insert(first.clone(), k);
            acc.add(self.sum(rest, &inner, f))
        })
    }
}

/// Named indices that occur once (free) in an explicit term.
fn free(t: &Term) -> Vec<String> {
    let mut all = Vec::new();
    collect(t, &mut all);
    let mut counts: BTreeMap<String, usize> = BTreeMap::new();
    for s in all {
        *counts.entry(s).or_insert(0) += 1;
    }
    counts
        .into_iter()
        .filter(|(_, n)| *n == 1)
        .map(|(s, _)| s)
        .collect()
}

fn collect(t: &Term, out: &mut Vec<String>) {
    let mut push = |i: &Index| {
        if let Index::Named(s) = i {
            out.push(s.clone());
        }
    };
    match t {
        Term::Comp(_, i) | Term::Normal(i) => push(i),
        Term::Kron(i, j) => {
            push(i);
            push(j);
        }
        Term::Param(_, idx) => idx.iter().for_each(push),
        Term::Pow(a, b) => {
            collect(a, out);
            collect(b, out);
        }
        Term::Mul(ts) => ts.iter().for_each(|f| out.extend(free(f))),
        Term::Add(ts) => {
            if let Some(s) = ts.first() {
                out.extend(free(s));
            }
        }
        _ => {}
    }
}

/// Peels `∂[i](p)` (at most two) off an input: the body and the seeds.
fn derivatives(t: &Term) -> (Vec<(&Index, &Point)>, &Term) {
    let mut ders = Vec::new();
    let mut body = t;
    while let Term::Der(i, p, b) = body {
        ders.push((i, p));
        body = b;
    }
    assert!((1..=2).contains(&ders.len()), "one or two derivatives");
    (ders, body)
}

/// Every assignment of the named indices.
fn assignments(ctx: &Context, dim: usize, names: &[String]) -> Vec<Vec<(String, usize)>> {
    let mut out = vec![vec![]];
    for name in names {
        let range = match ctx.index_kind(name) {
            IndexKind::Bulk => dim,
            IndexKind::Parallel => dim - 1,
        };
        out = out
            .into_iter()
            .flat_map(|a: Vec<(String, usize)>| {
                (0..range).map(move |k| {
                    let mut b = a.clone();
                    b.push((name.clone(), k));
                    b
                })
            })
            .collect();
    }
    out
}

/// The compiled normal form of `∂ … { body }` against hyper-duals on the
/// body, over all values of the free indices; the worst relative error.
fn derivative_error(ctx: &Context, case: &Case, v: &Values) -> f64 {
    let (ders, body) = derivatives(&case.input);
    // Free indices of the whole input: those of the body not contracted
    // with a derivative index, and the derivative indices not contracted.
    let mut names: Vec<String> = free(body);
    for (i, _) in &ders {
        if let Index::Named(s) = i {
            if let Some(k) = names.iter().position(|n| n == s) {
                names.remove(k);
            } else {
                names.push(s.clone());
            }
        }
    }
    let summed: Vec<String> = ders
        .iter()
        .filter_map(|(i, _)| i.name().map(String::from))
        .filter(|s| !names.contains(s))
        .collect::<std::collections::BTreeSet<_>>()
        .into_iter()
        .collect();
    names.sort();
    let mut got = Vec::new();
    let mut expect = Vec::new();
    for assignment in assignments(ctx, v.dim, &names) {
        let free_vals: Vec<(&str, usize)> =
            assignment.iter().map(|(k, x)| (k.as_str(), *x)).collect();
        got.push(compiled(ctx, &case.output, &free_vals, v));
        // Σ over summed derivative indices of the seeded body.
        let mut total = 0.0;
        for inner in assignments(ctx, v.dim, &summed) {
            let env: BTreeMap<String, usize> =
                assignment.iter().chain(inner.iter()).cloned().collect();
            let seeds: Vec<(String, usize, usize)> = ders
                .iter()
                .enumerate()
                .map(|(g, (i, p))| {
                    let k = match i {
                        Index::N => v.dim - 1,
                        Index::Named(s) => env[s],
                    };
                    (p.name.to_string(), k, g + 1)
                })
                .collect();
            let boundary_normal = ders
                .iter()
                .zip(&seeds)
                .any(|((_, p), (_, k, _))| *k == v.dim - 1 && ctx.is_boundary_point(p));
            if boundary_normal {
                // Boundary points move only along the wall.
                continue;
            }
            let dual = DualEval { ctx, v, seeds }.eval(body, &env);
            total += if ders.len() == 1 { dual.b } else { dual.e };
        }
        expect.push(total);
    }
    let size = expect.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    assert!(size > 0.0, "a vanishing derivative");
    got.iter()
        .zip(&expect)
        .map(|(g, e)| rel(*g, *e, size))
        .fold(0.0, f64::max)
}

fn check_derivatives(text: &str, dims: &[usize], seed: u64) {
    let (ctx, cases) = simplify_all(text);
    let mut rng = SplitMix64(seed);
    let mut worst: f64 = 0.0;
    for case in &cases {
        for &dim in dims {
            for _ in 0..SAMPLES {
                let v = random(&ctx, dim, &mut rng);
                let err = derivative_error(&ctx, case, &v);
                assert!(
                    err < TOL,
                    "{:?}\n relative error {err:e} at {v:?}",
                    case.input
                );
                worst = worst.max(err);
            }
        }
    }
    println!(
        "worst relative error {worst:.1e} over {} derivatives",
        cases.len()
    );
}

#[test]
fn derivatives_of_distance_powers_agree_with_duals() {
    check_derivatives(
        "dimension d\nparameters Delta D1 D2 D3\npoints x1 x2 x3\n\
         simplify ∂[mu](x1) { |x1 - x2|^(-2 Delta) }\n\
         simplify ∂[mu](x2) { |x1 - x2|^(-2 Delta) }\n\
         simplify ∂[mu](x1) { |x1 - x2|^(D3 - D1 - D2) |x1 - x3|^(D2 - D1 - D3) |x2 - x3|^(D1 - D2 - D3) }\n\
         simplify ∂[mu](x3) { |x1 - x2|^(D3 - D1 - D2) |x1 - x3|^(D2 - D1 - D3) |x2 - x3|^(D1 - D2 - D3) }\n\
         simplify ∂[mu](x1) ∂[nu](x1) { |x1 - x2|^(-2 Delta) }\n\
         simplify ∂[mu](x1) ∂[mu](x1) { |x1 - x2|^(-2 Delta) |x1 - x3|^(-13/10) }\n\
         simplify ∂[mu](x1) ∂[nu](x3) { |x1 - x2|^(D3 - D1 - D2) |x1 - x3|^(D2 - D1 - D3) |x2 - x3|^(D1 - D2 - D3) }\n",
        &[3, 4],
        0xe7a1_0101,
    );
}

#[test]
fn derivatives_with_numeric_dimensions_agree_with_duals() {
    check_derivatives(
        "dimension 4\npoints x1 x2 x3\n\
         simplify ∂[mu](x1) { |x1 - x2|^(-13/10) |x1 - x3|^(-19/10) |x2 - x3|^(-7/2) }\n\
         simplify ∂[mu](x2) { |x1 - x2|^(-13/10) |x1 - x3|^(-19/10) |x2 - x3|^(-7/2) }\n\
         simplify ∂[mu](x1) ∂[mu](x1) { |x1 - x2|^(-3) |x1 - x3|^(5/2) }\n",
        &[4],
        0xe7a1_0102,
    );
}

#[test]
fn derivatives_next_to_a_wall_agree_with_duals() {
    check_derivatives(
        "dimension d\nhalfspace y >= 0\nparameters Delta1 Delta2\npoints x1 x2\nboundary points s1\n\
         parallel a\n\
         simplify ∂[mu](x1) { xi(x1, x2) }\n\
         simplify ∂[n](x2) { xi(x1, x2) (2 x2[n])^(-Delta2) }\n\
         simplify ∂[mu](x1) { (2 x1[n])^(-Delta1) (2 x2[n])^(-Delta2) xi(x1, x2)^(-Delta1) }\n\
         simplify ∂[a](s1) { |x1 - s1|^(-2 Delta2) (x1[n])^(Delta2 - Delta1) }\n\
         simplify ∂[mu](x1) { |x1∥ - x2|^(-Delta1) }\n\
         simplify ∂[mu](x1) ∂[nu](x2) { xi(x1, x2) }\n",
        &[3, 4],
        0xe7a1_0103,
    );
}

#[test]
fn derivatives_of_killing_vectors_agree_with_duals() {
    check_derivatives(
        "dimension d\npoints x1 x2\nkilling eps special b\nparameters Delta\n\
         simplify ∂[mu](x1) { eps[nu](x1) }\n\
         simplify ∂[mu](x1) { eps[mu](x1) }\n\
         simplify ∂[mu](x1) { eps[nu](x1) x1[nu] |x1 - x2|^(-2 Delta) }\n",
        &[3, 4],
        0xe7a1_0104,
    );
}

// ───────────────────────── 3. errors ─────────────────────────

#[test]
fn a_correlator_left_is_a_compile_error() {
    let (ctx, cases) = simplify_all(
        "dimension 4\nscalar O dim Delta\npoints x x1 x2\n\
         simplify |x1 - x2|^(2 Delta) <O(x1) O(x2)>\n\
         simplify ∂[mu](x) <T[mu,nu](x) O(x1) O(x2)>\n",
    );
    for case in &cases {
        let e = compile(&ctx, &case.output, &[("nu".to_string(), 0)], 4).unwrap_err();
        assert_eq!(e.kind, ErrorKind::Numeric);
        assert!(e.message.contains("left unevaluated"), "{}", e.message);
        println!("{}", e.render());
    }
    let e = compile(&ctx, &cases[0].output, &[], 4).unwrap_err();
    assert!(e.message.contains("correlator"), "{}", e.message);
    assert!(e.message.contains("⟨O(x1) O(x2)⟩"), "{}", e.message);
}

#[test]
fn a_missing_parameter_value_is_an_error() {
    let (ctx, cases) = simplify_all(
        "dimension 3\nparameters Delta\npoints x1 x2\nkilling eps special b\n\
         simplify |x1 - x2|^(-2 Delta)\nsimplify eps[mu](x1)\n",
    );
    let mut v = random(&ctx, 3, &mut SplitMix64(7));
    v.scalars.clear();
    v.tensors.clear();
    let p = compile(&ctx, &cases[0].output, &[], 3).unwrap();
    let e = p.eval(&v).unwrap_err();
    assert_eq!(e.kind, ErrorKind::Numeric);
    assert!(
        e.message.contains("no value for the parameter Delta"),
        "{}",
        e.message
    );
    let e = p.eval_many(&v, "x1", &[vec![0.0; 3]]).unwrap_err();
    assert!(e.message.contains("Delta"), "{}", e.message);
    let q = compile(&ctx, &cases[1].output, &[("mu".to_string(), 0)], 3).unwrap();
    let e = q.eval(&v).unwrap_err();
    assert!(
        e.message.contains("no value for the parameter b"),
        "{}",
        e.message
    );
    v.tensors.insert("b".into(), vec![1.0, 2.0]);
    let e = q.eval(&v).unwrap_err();
    assert!(e.message.contains("components"), "{}", e.message);
}

#[test]
fn one_over_a_vanishing_distance_is_an_error() {
    let (ctx, cases) = simplify_all("dimension 3\npoints x1 x2\nsimplify 1/|x1 - x2|\n");
    // The lowering refuses |x1 - x1|; built by hand it is a compile error.
    let x1 = ctx.point_term("x1", false).unwrap();
    let zero = Term::Pow(
        Box::new(Term::Dist(x1.clone(), x1)),
        Box::new(Term::int(-1)),
    );
    let e = compile(&ctx, &zero, &[], 3).unwrap_err();
    assert_eq!(e.kind, ErrorKind::Numeric);
    assert!(e.message.contains("division by zero"), "{}", e.message);
    println!("{}", e.render());
    // With x1 = x2 in the values, an error when evaluating.
    let p = compile(&ctx, &cases[0].output, &[], 3).unwrap();
    let mut v = random(&ctx, 3, &mut SplitMix64(8));
    v.points.insert("x2".into(), v.points["x1"].clone());
    let e = p.eval(&v).unwrap_err();
    assert!(e.message.contains("division by zero"), "{}", e.message);
    assert!(e.message.contains("|x1 - x2|"), "{}", e.message);
    println!("{}", e.render());
    let e = p
        .eval_many(&v, "x2", &[vec![5.0, 0.0, 0.0], v.points["x1"].clone()])
        .unwrap_err();
    assert!(
        e.notes.iter().any(|n| n.contains("sample 1")),
        "{:?}",
        e.notes
    );
}

/// `pi` in dimension d is read through S_d = 2 π^(d/2)/Γ(d/2) (common
/// practice); its numeric value must be π itself (handbook value
/// 3.14159265358979323846…) in every whole dimension, and the claim relating
/// it to S_d (S_2 = 2π, S_3 = 4π, S_4 = 2π², S_5 = 8π²/3, S_6 = π³, S_7 =
/// 16π³/15, S_8 = π⁴/3, handbook values) must be proved, not refuted.
#[test]
fn pi_is_pi_in_every_whole_dimension() {
    use wardsmith::run::{run_source, Mode, Options};
    let areas = [
        (2, "2 pi"),
        (3, "4 pi"),
        (4, "2 pi^2"),
        (5, "8/3 pi^2"),
        (6, "pi^3"),
        (7, "16/15 pi^3"),
        (8, "1/3 pi^4"),
    ];
    for (d, area) in areas {
        let text = format!(
            "dimension {d}\nmodel conformal\nclaim {area} = S_d\ncompare π = 3.14159265358979323846\n"
        );
        let source = Source::new(format!("pi-d{d}.ward"), text);
        let outcome = run_source(
            &source,
            std::path::Path::new("."),
            Mode::Check,
            &Options::default(),
        )
        .unwrap_or_else(|e| panic!("d = {d}: {}", e.render()));
        assert_eq!(outcome.code, 0, "d = {d}:\n{}", outcome.report);
        assert!(
            outcome.report.contains("1 proved, 1 confirmed numerically"),
            "d = {d}:\n{}",
            outcome.report
        );
    }
}
