//! Numeric soundness of the shipped Ward rules.
//!
//! Each test runs a `.ward` text through the library (parse → lower → engine
//! with the shipped rules), takes the contact terms out of the normal form,
//! evaluates them on an explicit model correlator at seeded random points,
//! and compares with an integral of the model that never consults the rules:
//!
//! - `ward_divergence_*`: the coefficient of δ(x - x_i) in
//!   ∂_μ⟨T_μν(x) O(x1) O(x2)⟩ equals the flux of ⟨T_μν O O⟩ through a small
//!   sphere around x_i, and the flux through a sphere around no insertion is
//!   zero (no bulk term is missing). d = 3, 4; two values of Δ.
//! - `ward_trace_*`: the coefficient of δ(x - x_i) in ⟨T_μμ(x) O O⟩ equals the
//!   flux of ε_ν T_μν with ε = x - x_i (dilatation about x_i). d = 3, 4.
//! - `ward_divergence_halfspace_*`: for the free scalar with a Dirichlet or a
//!   Neumann wall, the two terms of n_ν ∂_μ⟨T_μν(x) φ²(x1)⟩ (the bulk contact
//!   term and the displacement term δ(y) ⟨D(x∥) φ²(x1)⟩) integrate over all x
//!   to zero, with ⟨D φ²⟩ from Wick contraction. Dropping or flipping the D
//!   term fails, so the check is not vacuous. d = 3, 4.
//!
//! Integrated identities are independent of the contact-term scheme, so they
//! test the physics of the rules, not their spelling (docs/conventions.md §8).

// Tensor components read best as explicit index loops.
#![allow(clippy::needless_range_loop)]

mod support;

use std::sync::Arc;

use num_rational::BigRational;
use num_traits::{One, ToPrimitive};
use support::{
    axpy, dot, gauss_legendre, norm, plane_integral, sphere_area, sphere_rule, sub, SplitMix64,
    Vec4,
};
use wardsmith::context::Context;
use wardsmith::diagnostic::Source;
use wardsmith::egraph::Limits;
use wardsmith::engine::Engine;
use wardsmith::lower::{lower, ItemKind};
use wardsmith::rules::RuleBook;
use wardsmith::syntax::parse_file;
use wardsmith::term::{Index, Op, Point, Term};

/// Required agreement (relative).
const TOL: f64 = 1e-9;

// ───────────────────────── the engine side ─────────────────────────

/// Normal forms of every `simplify` statement of `text`, with the file's
/// declarations.
fn simplify_all(text: &str) -> (Arc<Context>, Vec<Term>) {
    let source = Source::new("soundness.ward", text);
    let file = parse_file(&source).unwrap_or_else(|e| panic!("{}", e.render()));
    let program = lower(&source, &file).unwrap_or_else(|e| panic!("{}", e.render()));
    let book = Arc::new(RuleBook::shipped().unwrap_or_else(|e| panic!("{}", e.render())));
    let engine = Engine::new(program.ctx.clone(), book, Limits::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    let terms = program
        .items
        .iter()
        .map(|item| match &item.kind {
            ItemKind::Simplify { expr, .. } => {
                engine
                    .simplify(expr)
                    .unwrap_or_else(|e| panic!("{}", e.render()))
                    .term
            }
            _ => panic!("only `simplify` statements here"),
        })
        .collect();
    (program.ctx.clone(), terms)
}

fn monomials(t: &Term) -> Vec<&Term> {
    match t {
        Term::Add(ts) => ts.iter().collect(),
        t if t.is_zero() => Vec::new(),
        t => vec![t],
    }
}

fn factors(m: &Term) -> Vec<&Term> {
    match m {
        Term::Mul(fs) => fs.iter().collect(),
        f => vec![f],
    }
}

/// The one monomial of `t` that carries the δ-factor `delta`, split into its
/// exact coefficient and its other factors.
fn contact(t: &Term, delta: &Term) -> (BigRational, Vec<Term>) {
    let hits: Vec<&Term> = monomials(t)
        .into_iter()
        .filter(|m| factors(m).contains(&delta))
        .collect();
    assert_eq!(hits.len(), 1, "expected one term with {delta:?} in {t:#?}");
    let mut coef = BigRational::one();
    let mut rest = Vec::new();
    for f in factors(hits[0]) {
        match f {
            Term::Num(c) => coef *= c,
            f if f == delta => {}
            f => rest.push(f.clone()),
        }
    }
    (coef, rest)
}

fn ratio(n: i64, d: i64) -> BigRational {
    BigRational::new(n.into(), d.into())
}

fn to_f64(c: &BigRational) -> f64 {
    c.numer().to_f64().unwrap() / c.denom().to_f64().unwrap()
}

fn point(ctx: &Context, name: &str, par: bool) -> Point {
    ctx.point_term(name, par)
        .unwrap_or_else(|| panic!("point {name} is not declared"))
}

fn scalar(ctx: &Context, name: &str, at: &str, par: bool) -> Op {
    Op {
        point: point(ctx, at, par),
        name: name.into(),
        indices: Vec::new(),
    }
}

// ───────────────────────── evaluating engine output ─────────────────────────

/// A model of the correlators that appear in the output; operators are given
/// by name and position.
trait Model {
    fn value(&self, ops: &[(&str, Vec4)]) -> f64;
    /// ∂/∂ (position of ops[slot])^dir of the correlator.
    fn derivative(&self, ops: &[(&str, Vec4)], slot: usize, dir: usize) -> f64;
}

/// Numeric values for the points and the free indices of a term, and the
/// model of its correlators. The normal is n = +e_y, y = x^{d-1} (0-based).
struct Eval<'a> {
    d: usize,
    points: &'a [(&'a str, Vec4)],
    indices: &'a [(&'a str, usize)],
    model: &'a dyn Model,
}

impl Eval<'_> {
    fn at(&self, p: &Point) -> Vec4 {
        let mut v = self
            .points
            .iter()
            .find(|(n, _)| **n == *p.name)
            .unwrap_or_else(|| panic!("no value for {p:?}"))
            .1;
        if p.par {
            v[self.d - 1] = 0.0;
        }
        v
    }

    fn component(&self, i: &Index) -> usize {
        match i {
            Index::N => self.d - 1,
            Index::Named(s) => {
                self.indices
                    .iter()
                    .find(|(n, _)| n == s)
                    .unwrap_or_else(|| panic!("no value for index {s}"))
                    .1
            }
        }
    }

    fn ops(&self, ops: &[Op]) -> Vec<(&'static str, Vec4)> {
        ops.iter()
            .map(|o| {
                assert!(
                    o.indices.is_empty(),
                    "only scalar insertions are modelled: {o:?}"
                );
                let name: &'static str = match o.name.as_str() {
                    "O" => "O",
                    "P" => "P",
                    "D" => "D",
                    other => panic!("no model for operator {other}"),
                };
                (name, self.at(&o.point))
            })
            .collect()
    }

    fn factor(&self, f: &Term) -> f64 {
        match f {
            Term::Num(c) => to_f64(c),
            Term::Normal(i) => f64::from(u8::from(self.component(i) == self.d - 1)),
            Term::Corr(ops) => self.model.value(&self.ops(ops)),
            Term::Der(i, p, body) => {
                let Term::Corr(ops) = &**body else {
                    panic!("the evaluator only differentiates correlators: {f:?}")
                };
                let moving: Vec<usize> = (0..ops.len())
                    .filter(|&k| ops[k].point.depends_on(p))
                    .collect();
                assert_eq!(
                    moving.len(),
                    1,
                    "derivative must act on exactly one insertion: {f:?}"
                );
                assert!(
                    !ops[moving[0]].point.par && !p.par,
                    "derivative at a boundary projection: {f:?}"
                );
                self.model
                    .derivative(&self.ops(ops), moving[0], self.component(i))
            }
            other => panic!("the evaluator does not handle {other:?}"),
        }
    }

    fn product(&self, coef: &BigRational, fs: &[Term]) -> f64 {
        to_f64(coef) * fs.iter().map(|f| self.factor(f)).product::<f64>()
    }
}

// ───────────────────────── models ─────────────────────────

/// ⟨O(x1) O(x2)⟩ = C_O / |x12|^{2Δ}. (docs/conventions.md §1, common practice)
struct TwoPoint {
    c: f64,
    delta: f64,
}

impl Model for TwoPoint {
    fn value(&self, ops: &[(&str, Vec4)]) -> f64 {
        assert!(
            ops.len() == 2 && ops.iter().all(|o| o.0 == "O"),
            "not ⟨O O⟩: {ops:?}"
        );
        self.c / norm(&sub(&ops[0].1, &ops[1].1)).powf(2.0 * self.delta)
    }

    fn derivative(&self, ops: &[(&str, Vec4)], slot: usize, dir: usize) -> f64 {
        let z = sub(&ops[slot].1, &ops[1 - slot].1);
        -2.0 * self.delta * self.c * z[dir] / dot(&z, &z).powf(self.delta + 1.0)
    }
}

/// ⟨T_μν(x) O(x1) O(x2)⟩ = a h_μν(X̂) / (|x - x1|^d |x - x2|^d |x12|^{2Δ-d}),
/// h_μν = X̂_μ X̂_ν - δ_μν/d, X = (x1 - x)/|x1 - x|² - (x2 - x)/|x2 - x|²,
/// a = -dΔC_O/((d-1)S_d).
/// Osborn & Petkou 1994, hep-th/9307010; sign of a fixed by W4 (docs/conventions.md §3, derived).
fn t_o_o(d: usize, delta: f64, c_o: f64, x: &Vec4, x1: &Vec4, x2: &Vec4) -> [[f64; 4]; 4] {
    let df = d as f64;
    let a = -df * delta * c_o / ((df - 1.0) * sphere_area(d));
    let (v1, v2) = (sub(x1, x), sub(x2, x));
    let (s1, s2) = (dot(&v1, &v1), dot(&v2, &v2));
    let big_x = axpy(&axpy(&[0.0; 4], 1.0 / s1, &v1), -1.0 / s2, &v2);
    let xx = dot(&big_x, &big_x);
    let pref =
        a / (s1.powf(df / 2.0) * s2.powf(df / 2.0) * norm(&sub(x1, x2)).powf(2.0 * delta - df));
    let mut t = [[0.0; 4]; 4];
    for mu in 0..d {
        for nu in 0..d {
            let kron = if mu == nu { 1.0 } else { 0.0 };
            t[mu][nu] = pref * (big_x[mu] * big_x[nu] / xx - kron / df);
        }
    }
    t
}

/// Quadrature rule on S^{d-1} used for the fluxes.
fn flux_rule(d: usize) -> Vec<(Vec4, f64)> {
    sphere_rule(d, 32, 48)
}

/// ∮_{|x - c| = r} N_μ ε_ν(x) T_μν(x) dS, with ε = `eps(x)`.
fn flux(
    d: usize,
    rule: &[(Vec4, f64)],
    c: &Vec4,
    r: f64,
    t: impl Fn(&Vec4) -> [[f64; 4]; 4],
    eps: impl Fn(&Vec4) -> Vec4,
) -> f64 {
    let area = r.powi(d as i32 - 1);
    let mut total = 0.0;
    for (normal, w) in rule {
        let x = axpy(c, r, normal);
        let (tx, e) = (t(&x), eps(&x));
        let mut s = 0.0;
        for mu in 0..d {
            for nu in 0..d {
                s += normal[mu] * e[nu] * tx[mu][nu];
            }
        }
        total += w * area * s;
    }
    total
}

/// The unit vector e_ν.
fn unit(nu: usize) -> Vec4 {
    let mut e = [0.0; 4];
    e[nu] = 1.0;
    e
}

/// Two random points of R^d at least 0.5 apart.
fn two_points(rng: &mut SplitMix64, d: usize) -> (Vec4, Vec4) {
    loop {
        let (x1, x2) = (rng.point(d, -1.0, 1.0), rng.point(d, -1.0, 1.0));
        if norm(&sub(&x1, &x2)) > 0.5 {
            return (x1, x2);
        }
    }
}

// ───────────────────────── 1. ward-divergence ─────────────────────────

fn ward_divergence(d: usize, seed: u64) {
    let rule = flux_rule(d);
    let mut rng = SplitMix64::new(seed);
    let mut worst: f64 = 0.0;
    for (num, den) in [(13, 10), (27, 10)] {
        let delta = num as f64 / den as f64;
        let text = format!(
            "dimension {d}\nscalar O dim {num}/{den}\npoints x x1 x2\n\
             simplify ∂[mu](x) <T[mu,nu](x) O(x1) O(x2)>\n"
        );
        let (ctx, out) = simplify_all(&text);
        let out = &out[0];
        assert_eq!(
            monomials(out).len(),
            2,
            "one contact term per insertion: {out:#?}"
        );
        let model = TwoPoint { c: 1.0, delta };
        let two = Term::Corr(vec![
            scalar(&ctx, "O", "x1", false),
            scalar(&ctx, "O", "x2", false),
        ]);
        for _ in 0..4 {
            let (x1, x2) = two_points(&mut rng, d);
            let r = norm(&sub(&x1, &x2)) / 4.0;
            let t = |x: &Vec4| t_o_o(d, delta, 1.0, x, &x1, &x2);
            let mut scale = f64::INFINITY;
            for (name, centre) in [("x1", x1), ("x2", x2)] {
                let at = point(&ctx, name, false);
                let (coef, rest) =
                    contact(out, &Term::DeltaFn(point(&ctx, "x", false), at.clone()));
                // Shape: - δ(x - x_i) ∂[nu](x_i) ⟨O(x1) O(x2)⟩.
                assert_eq!(coef, -BigRational::one(), "coefficient of δ(x - {name})");
                assert_eq!(
                    rest,
                    vec![Term::Der(
                        Index::Named("nu".into()),
                        at,
                        Box::new(two.clone())
                    )]
                );
                let mut engine_side = [0.0; 4];
                let mut reference = [0.0; 4];
                for nu in 0..d {
                    let points = [("x", centre), ("x1", x1), ("x2", x2)];
                    let indices = [("nu", nu)];
                    let ev = Eval {
                        d,
                        points: &points,
                        indices: &indices,
                        model: &model,
                    };
                    engine_side[nu] = ev.product(&coef, &rest);
                    // Divergence theorem: ∮ N_μ T_μν over the sphere = ∫_B ∂_μ T_μν
                    // = the δ(x - x_i) coefficient (Osborn & Petkou 1994, hep-th/9307010).
                    reference[nu] = flux(d, &rule, &centre, r, t, |_| unit(nu));
                }
                let err = norm(&sub(&engine_side, &reference)) / norm(&reference);
                scale = scale.min(norm(&reference));
                worst = worst.max(err);
                assert!(err < TOL, "d = {d}, Δ = {delta}, δ(x - {name}): engine {engine_side:?}, flux {reference:?}, rel. error {err:e}");
            }
            // No bulk term: the flux through a sphere around no insertion vanishes
            // (the model is conserved away from insertions; Osborn & Petkou 1994).
            // Measured against the insertion fluxes at the same radius.
            let empty = axpy(&x1, -1.0, &sub(&x2, &x1));
            let mut residual = [0.0; 4];
            for nu in 0..d {
                residual[nu] = flux(d, &rule, &empty, r, t, |_| unit(nu));
            }
            let err = norm(&residual) / scale;
            worst = worst.max(err);
            assert!(
                err < TOL,
                "d = {d}: flux around no insertion {residual:?} (scale {scale:e})"
            );
        }
    }
    println!("ward-divergence d = {d}: worst relative error {worst:.2e}");
}

#[test]
fn ward_divergence_d3() {
    ward_divergence(3, 0x5eed_0301);
}

#[test]
fn ward_divergence_d4() {
    ward_divergence(4, 0x5eed_0401);
}

// ───────────────────────── 2. ward-trace ─────────────────────────

fn ward_trace(d: usize, seed: u64) {
    let rule = flux_rule(d);
    let mut rng = SplitMix64::new(seed);
    let mut worst: f64 = 0.0;
    for (num, den) in [(13, 10), (27, 10)] {
        let delta = num as f64 / den as f64;
        let text = format!(
            "dimension {d}\nscalar O dim {num}/{den}\npoints x x1 x2\n\
             simplify <T[mu,mu](x) O(x1) O(x2)>\n"
        );
        let (ctx, out) = simplify_all(&text);
        let out = &out[0];
        assert_eq!(
            monomials(out).len(),
            2,
            "one contact term per insertion: {out:#?}"
        );
        let model = TwoPoint { c: 1.0, delta };
        let two = Term::Corr(vec![
            scalar(&ctx, "O", "x1", false),
            scalar(&ctx, "O", "x2", false),
        ]);
        for _ in 0..4 {
            let (x1, x2) = two_points(&mut rng, d);
            let r = norm(&sub(&x1, &x2)) / 4.0;
            let t = |x: &Vec4| t_o_o(d, delta, 1.0, x, &x1, &x2);
            for (name, centre) in [("x1", x1), ("x2", x2)] {
                let at = point(&ctx, name, false);
                let (coef, rest) = contact(out, &Term::DeltaFn(point(&ctx, "x", false), at));
                // Shape: - Δ δ(x - x_i) ⟨O(x1) O(x2)⟩, Δ exact.
                assert_eq!(coef, -ratio(num, den), "coefficient of δ(x - {name})");
                assert_eq!(rest, vec![two.clone()]);
                let points = [("x", centre), ("x1", x1), ("x2", x2)];
                let ev = Eval {
                    d,
                    points: &points,
                    indices: &[],
                    model: &model,
                };
                let engine_side = ev.product(&coef, &rest);
                // ε = x - x_i: ∂_μ ε_ν = δ_μν and ε(x_i) = 0, so ∮ N_μ ε_ν T_μν
                // = ∫_B T_μμ = the δ(x - x_i) coefficient (W4 with a dilatation,
                // docs/conventions.md §2, derived; ⟨T O O⟩ of Osborn & Petkou 1994, hep-th/9307010).
                let reference = flux(d, &rule, &centre, r, t, |x| sub(x, &centre));
                let err = (engine_side - reference).abs() / reference.abs();
                worst = worst.max(err);
                assert!(err < TOL, "d = {d}, Δ = {delta}, δ(x - {name}): engine {engine_side}, flux {reference}, rel. error {err:e}");
            }
        }
    }
    println!("ward-trace d = {d}: worst relative error {worst:.2e}");
}

#[test]
fn ward_trace_d3() {
    ward_trace(3, 0x5eed_0302);
}

#[test]
fn ward_trace_d4() {
    ward_trace(4, 0x5eed_0402);
}

// ───────────────────────── 3. ward-divergence-halfspace ─────────────────────────

/// The free scalar in y ≥ 0 with a Dirichlet or Neumann wall: P = :φ²:,
/// D the displacement operator.
struct FreeScalarWall {
    d: usize,
    neumann: bool,
}

/// G(x, x') and its derivatives with respect to x.
struct Propagator {
    value: f64,
    grad: Vec4,
    /// Σ_a ∂_a ∂_a over the d - 1 parallel directions.
    lap_par: f64,
}

impl FreeScalarWall {
    /// C_φ = 1/((d-2)S_d). (docs/conventions.md §4, common practice)
    fn c_phi(&self) -> f64 {
        1.0 / ((self.d as f64 - 2.0) * sphere_area(self.d))
    }

    /// +1 Neumann, -1 Dirichlet.
    fn sign(&self) -> f64 {
        if self.neumann {
            1.0
        } else {
            -1.0
        }
    }

    /// G(x, x') = C_φ(|x - x'|^{2-d} ± |x - x̄'|^{2-d}), x̄' = (x'∥, -y'):
    /// the image propagator (docs/conventions.md §4, common practice), derivatives by
    /// ∂_μ|z|^{2-d} = (2-d) z_μ |z|^{-d}.
    fn propagator(&self, x: &Vec4, xp: &Vec4) -> Propagator {
        let (d, df) = (self.d, self.d as f64);
        let mut image = *xp;
        image[d - 1] = -xp[d - 1];
        let mut out = Propagator {
            value: 0.0,
            grad: [0.0; 4],
            lap_par: 0.0,
        };
        for (source, s) in [(xp, 1.0), (&image, self.sign())] {
            let z = sub(x, source);
            let r2 = dot(&z, &z);
            let par2 = r2 - z[d - 1] * z[d - 1];
            out.value += s * r2.powf(1.0 - df / 2.0);
            for mu in 0..d {
                out.grad[mu] += s * (2.0 - df) * z[mu] * r2.powf(-df / 2.0);
            }
            out.lap_par += s
                * (2.0 - df)
                * ((df - 1.0) * r2.powf(-df / 2.0) - df * par2 * r2.powf(-df / 2.0 - 1.0));
        }
        let c = self.c_phi();
        out.value *= c;
        out.grad = axpy(&[0.0; 4], c, &out.grad);
        out.lap_par *= c;
        out
    }

    /// ⟨D(s) :φ²:(x1)⟩ by Wick contraction (docs/conventions.md §4, derived: free-field
    /// Wick contraction), D at the boundary point s:
    /// Dirichlet D = ½(∂_nφ)²: 2 · ½ (∂_n G)²;
    /// Neumann D = -½(∂_aφ̂)² + ξ∂_a∂_a φ̂²: -(∂_a G)² + 2ξ ∂_a∂_a (G²),
    /// ξ = (d-2)/(4(d-1)). The disconnected part ⟨D⟩⟨φ²⟩ vanishes since
    /// ⟨T_nn⟩ = 0 (docs/conventions.md §7, derived).
    fn d_phi2(&self, s: &Vec4, x1: &Vec4) -> f64 {
        let d = self.d;
        let g = self.propagator(s, x1);
        if self.neumann {
            let xi = (d as f64 - 2.0) / (4.0 * (d as f64 - 1.0));
            let grad2: f64 = (0..d - 1).map(|a| g.grad[a] * g.grad[a]).sum();
            -grad2 + 2.0 * xi * (2.0 * grad2 + 2.0 * g.value * g.lap_par)
        } else {
            g.grad[d - 1] * g.grad[d - 1]
        }
    }
}

impl Model for FreeScalarWall {
    fn value(&self, ops: &[(&str, Vec4)]) -> f64 {
        let d = self.d as f64;
        match ops {
            // ⟨φ²(x)⟩ = ± C_φ/(2y)^{d-2} (docs/conventions.md §4, derived).
            [("P", x)] => self.sign() * self.c_phi() / (2.0 * x[self.d - 1]).powf(d - 2.0),
            [("D", s), ("P", x)] => self.d_phi2(s, x),
            _ => panic!("no model for {ops:?}"),
        }
    }

    fn derivative(&self, ops: &[(&str, Vec4)], slot: usize, dir: usize) -> f64 {
        let d = self.d as f64;
        match (ops, slot) {
            // ∂_y [± C_φ (2y)^{2-d}] = ± 2(2-d) C_φ (2y)^{1-d}; parallel derivatives vanish.
            ([("P", x)], 0) if dir == self.d - 1 => {
                self.sign() * 2.0 * (2.0 - d) * self.c_phi() * (2.0 * x[self.d - 1]).powf(1.0 - d)
            }
            ([("P", _)], 0) => 0.0,
            _ => panic!("no model for ∂ of {ops:?}"),
        }
    }
}

fn ward_divergence_halfspace(d: usize, neumann: bool, seed: u64) {
    let text = format!(
        "dimension {d}\nhalfspace y >= 0\nscalar P dim d-2\npoints x x1\n\
         simplify n[nu] ∂[mu](x) <T[mu,nu](x) P(x1)>\n"
    );
    let (ctx, out) = simplify_all(&text);
    let out = &out[0];
    // Shape: exactly - δ(x - x1) ∂[n](x1) ⟨P(x1)⟩ + δ(y(x)) ⟨D(x∥) P(x1)⟩.
    assert_eq!(
        monomials(out).len(),
        2,
        "bulk contact term and displacement term: {out:#?}"
    );
    let (x, x1) = (point(&ctx, "x", false), point(&ctx, "x1", false));
    let (bulk_coef, bulk_rest) = contact(out, &Term::DeltaFn(x.clone(), x1.clone()));
    assert_eq!(bulk_coef, -BigRational::one());
    let one_point = Term::Corr(vec![scalar(&ctx, "P", "x1", false)]);
    assert_eq!(
        bulk_rest,
        vec![Term::Der(Index::N, x1.clone(), Box::new(one_point))]
    );
    let (wall_coef, wall_rest) = contact(out, &Term::DeltaY(x.clone()));
    assert_eq!(wall_coef, BigRational::one());
    assert_eq!(
        wall_rest,
        vec![Term::Corr(vec![
            scalar(&ctx, "D", "x", true),
            scalar(&ctx, "P", "x1", false)
        ])]
    );

    let model = FreeScalarWall { d, neumann };
    let (c, s_d) = (model.c_phi(), sphere_area(d));
    let mut rng = SplitMix64::new(seed);
    let mut worst: f64 = 0.0;
    for sample in 0..5 {
        let mut p1 = rng.point(d - 1, -1.0, 1.0);
        let y1 = rng.uniform(0.2, 2.0);
        p1[d - 1] = y1;
        let mut foot = p1;
        foot[d - 1] = 0.0;

        if sample == 0 {
            // One-line cross-check of the Wick result against the bulk-to-boundary
            // form b (2y)²/(ρ² + y²)^d with b_{φ²D} = +1/S_d² Dirichlet, -1/S_d²
            // Neumann, (2y) convention (docs/conventions.md §7, derived), and, Dirichlet,
            // against (∂_n G)² = 4(d-2)² C_φ² y1²/(ρ² + y1²)^d (docs/conventions.md §4, derived:
            // free-field Wick contraction).
            let s = axpy(&foot, 0.37, &unit(0));
            let u = dot(&sub(&s, &foot), &sub(&s, &foot)) + y1 * y1;
            let b = -model.sign() / (s_d * s_d);
            let wick = model.d_phi2(&s, &p1);
            let closed = b * (2.0 * y1).powi(2) / u.powi(d as i32);
            assert!(
                (wick - closed).abs() < 1e-12 * closed.abs(),
                "b_φ²D: Wick {wick}, expected {closed}"
            );
            let dim2 = (d as f64 - 2.0).powi(2);
            let images = 4.0 * dim2 * c * c * y1 * y1 / u.powi(d as i32);
            assert!(
                neumann || (wick - images).abs() < 1e-12 * images,
                "(∂_n G)²: {wick} vs {images}"
            );
        }

        // ∫ d^d x of - δ(x - x1) ∂[n](x1)⟨P(x1)⟩: the factor at x = x1.
        let points = [("x", p1), ("x1", p1)];
        let bulk = Eval {
            d,
            points: &points,
            indices: &[],
            model: &model,
        }
        .product(&bulk_coef, &bulk_rest);
        // ∫ d^d x of δ(y(x)) ⟨D(x∥) P(x1)⟩: the boundary-plane integral.
        let wall = plane_integral(d, &foot, y1, 40, 24, |s| {
            let points = [("x", *s), ("x1", p1)];
            Eval {
                d,
                points: &points,
                indices: &[],
                model: &model,
            }
            .product(&wall_coef, &wall_rest)
        });
        // T extended by zero to y < 0 decays, so ∫ ∂_μ T_μν = 0 over R^d:
        // the two terms cancel (Herzog, Huang & Jensen 2017, arXiv:1709.07431;
        // W5 with a normal translation, docs/conventions.md §7, derived).
        let scale = bulk.abs().max(wall.abs());
        let err = (bulk + wall).abs() / bulk.abs().min(wall.abs());
        worst = worst.max(err);
        assert!(err < TOL, "d = {d}, neumann = {neumann}, x1 = {p1:?}: bulk {bulk}, wall {wall}, rel. error {err:e}");
        // Not vacuous: without the D term, or with its sign flipped, the sum is O(1) off.
        assert!(bulk.abs() / scale > 0.5, "dropping D leaves {bulk}");
        assert!(
            (bulk - wall).abs() / scale > 0.5,
            "flipping D leaves {}",
            bulk - wall
        );
    }
    println!(
        "ward-divergence-halfspace d = {d}, neumann = {neumann}: worst relative error {worst:.2e}"
    );
}

#[test]
fn ward_divergence_halfspace_dirichlet_d3() {
    ward_divergence_halfspace(3, false, 0x5eed_0303);
}

#[test]
fn ward_divergence_halfspace_dirichlet_d4() {
    ward_divergence_halfspace(4, false, 0x5eed_0403);
}

#[test]
fn ward_divergence_halfspace_neumann_d3() {
    ward_divergence_halfspace(3, true, 0x5eed_0304);
}

#[test]
fn ward_divergence_halfspace_neumann_d4() {
    ward_divergence_halfspace(4, true, 0x5eed_0404);
}

// ───────────────────────── the numerical tools themselves ─────────────────────────

/// Gauss–Legendre integrates polynomials of degree 2n - 1 exactly, and the
/// sphere rules have total weight S_d (common practice).
#[test]
fn quadrature_self_check() {
    let rule = gauss_legendre(12);
    let moment: f64 = rule.iter().map(|(x, w)| w * x.powi(22)).sum();
    assert!((moment - 2.0 / 23.0).abs() < 1e-14, "∫x²² = {moment}");
    for k in 2..=4 {
        let area: f64 = sphere_rule(k, 8, 8).iter().map(|(_, w)| w).sum();
        assert!((area - sphere_area(k)).abs() < 1e-13, "S_{k} = {area}");
        // ⟨x_0²⟩ over the sphere is 1/k.
        let second: f64 = sphere_rule(k, 8, 8)
            .iter()
            .map(|(v, w)| w * v[0] * v[0])
            .sum();
        assert!((second / sphere_area(k) - 1.0 / k as f64).abs() < 1e-13);
    }
}
