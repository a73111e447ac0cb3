//! A numeric evaluator of `Term`s for the calculus oracle in
//! `tests/calculus.rs`: seeded random models (points, parameters, concrete
//! unknown functions, a smooth correlator), truncated multivariate Taylor
//! numbers ("jets") for exact forward-mode derivatives, and sixth-order
//! central differences as a second, independent differentiator.
//!
//! Nothing here consults the engine's symbolic rules: a derivative `∂[i](p)`
//! in a term is evaluated by perturbing the numeric coordinate p[i].

#![allow(dead_code)]

use std::collections::BTreeMap;

use num_rational::BigRational;
use num_traits::ToPrimitive;
use wardsmith::context::{Context, IndexKind};
use wardsmith::term::{Index, Integral, Point, Region, Term};

// The seeded PRNG is shared with the soundness tests.
pub use crate::support::SplitMix64;

// ───────────────────────── jets ─────────────────────────

/// Number of independent infinitesimals: the deepest nesting of derivatives
/// a term may have.
pub const GENS: usize = 4;
const SIZE: usize = 1 << GENS;

/// A number a = Σ_A c_A ε_A over subsets A of {ε_0, …, ε_{GENS-1}}, with
/// ε_i² = 0 and commuting ε's: the truncated Taylor expansion in GENS
/// independent first-order perturbations. The coefficient of ε_j is the
/// derivative along the perturbation seeded as ε_j; products of distinct
/// ε's carry mixed higher derivatives (common practice: hyper-dual numbers).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Jet {
    c: [f64; SIZE],
}

impl Jet {
    pub fn constant(v: f64) -> Jet {
        let mut c = [0.0; SIZE];
        c[0] = v;
        Jet { c }
    }

    pub fn zero() -> Jet {
        Jet::constant(0.0)
    }

    pub fn value(&self) -> f64 {
        self.c[0]
    }

    pub fn is_constant(&self) -> bool {
        self.c[1..].iter().all(|x| *x == 0.0)
    }

    /// a + ε_g.
    pub fn seeded(mut self, g: usize) -> Jet {
        self.c[1 << g] += 1.0;
        self
    }

    /// The coefficient of ε_g, as a jet in the other infinitesimals: the
    /// derivative along the perturbation seeded as ε_g.
    pub fn along(&self, g: usize) -> Jet {
        let bit = 1 << g;
        let mut c = [0.0; SIZE];
        for (a, slot) in c.iter_mut().enumerate() {
            if a & bit == 0 {
                *slot = self.c[a | bit];
            }
        }
        Jet { c }
    }

    pub fn add(&self, o: &Jet) -> Jet {
        let mut c = self.c;
        for (x, y) in c.iter_mut().zip(o.c.iter()) {
            *x += y;
        }
        Jet { c }
    }

    pub fn sub(&self, o: &Jet) -> Jet {
        self.add(&o.scale(-1.0))
    }

    pub fn scale(&self, s: f64) -> Jet {
        let mut c = self.c;
        for x in c.iter_mut() {
            *x *= s;
        }
        Jet { c }
    }

    pub fn mul(&self, o: &Jet) -> Jet {
        let mut c = [0.0; SIZE];
        for a in 0..SIZE {
            if self.c[a] == 0.0 {
                continue;
            }
            let rest = (SIZE - 1) & !a;
            // Every subset b of the complement of a.
            let mut b = rest;
            loop {
                c[a | b] += self.c[a] * o.c[b];
                if b == 0 {
                    break;
                }
                b = (b - 1) & rest;
            }
        }
        Jet { c }
    }

    /// f(a) from the derivatives f(a₀), f'(a₀), …, f^(GENS)(a₀):
    /// f(a₀ + δ) = Σ_m f^(m)(a₀) δ^m / m!, exact since δ^(GENS+1) = 0.
    pub fn compose(&self, derivs: &[f64]) -> Jet {
        assert!(derivs.len() > GENS);
        let mut delta = *self;
        delta.c[0] = 0.0;
        let mut power = Jet::constant(1.0);
        let mut out = Jet::zero();
        let mut factorial = 1.0;
        for (m, fm) in derivs.iter().enumerate().take(GENS + 1) {
            if m > 0 {
                power = power.mul(&delta);
                factorial *= m as f64;
            }
            out = out.add(&power.scale(fm / factorial));
        }
        out
    }

    /// a^e for a real exponent (a > 0 unless e is a whole number).
    pub fn powf(&self, e: f64) -> Jet {
        let a0 = self.value();
        let whole = e.fract() == 0.0 && e.abs() < 1e6;
        assert!(
            whole || a0 > 0.0,
            "non-integer power {e} of a non-positive base {a0}"
        );
        let mut derivs = [0.0; GENS + 1];
        let mut falling = 1.0;
        for (m, slot) in derivs.iter_mut().enumerate() {
            let k = e - m as f64;
            *slot = falling * if whole { a0.powi(k as i32) } else { a0.powf(k) };
            falling *= k;
        }
        self.compose(&derivs)
    }

    pub fn exp(&self) -> Jet {
        self.compose(&[self.value().exp(); GENS + 1])
    }

    pub fn ln(&self) -> Jet {
        let a0 = self.value();
        assert!(a0 > 0.0, "logarithm of {a0}");
        let mut derivs = [a0.ln(); GENS + 1];
        let mut c = 1.0;
        for (m, slot) in derivs.iter_mut().enumerate().skip(1) {
            // d^m ln a = (-1)^(m-1) (m-1)! a^(-m)
            *slot = c * a0.powi(-(m as i32));
            c *= -(m as f64);
        }
        self.compose(&derivs)
    }

    /// a^b for a jet exponent: exp(b ln a).
    pub fn pow(&self, b: &Jet) -> Jet {
        if b.is_constant() {
            self.powf(b.value())
        } else {
            b.mul(&self.ln()).exp()
        }
    }

    pub fn sqrt(&self) -> Jet {
        self.powf(0.5)
    }
}

// ───────────────────────── unknown functions ─────────────────────────

/// A concrete choice for an unknown function F, with every derivative in
/// closed form.
#[derive(Clone, Copy, Debug)]
pub enum Unknown {
    /// F(u) = exp(-u): F^(k) = (-1)^k exp(-u).
    ExpMinus,
    /// F(u) = u^(3/2)/(1 + u): by the Leibniz rule,
    /// F^(k) = Σ_j C(k,j) (3/2)_j u^(3/2-j) (-1)^(k-j) (k-j)! (1+u)^(-1-k+j),
    /// with (3/2)_j the falling factorial.
    PowerRatio,
}

impl Unknown {
    pub fn derivative(self, k: u32, u: f64) -> f64 {
        match self {
            Unknown::ExpMinus => {
                if k % 2 == 0 {
                    (-u).exp()
                } else {
                    -(-u).exp()
                }
            }
            Unknown::PowerRatio => {
                assert!(u > 0.0, "u^(3/2) at u = {u}");
                let k = k as i32;
                let mut total = 0.0;
                for j in 0..=k {
                    let binom = binomial(k, j);
                    let mut falling = 1.0;
                    for i in 0..j {
                        falling *= 1.5 - f64::from(i);
                    }
                    let g = falling * u.powf(1.5 - f64::from(j));
                    let m = k - j;
                    let sign = if m % 2 == 0 { 1.0 } else { -1.0 };
                    let h = sign * factorial(m) * (1.0 + u).powi(-1 - m);
                    total += binom * g * h;
                }
                total
            }
        }
    }

    /// F^(k)(u) on a jet argument.
    pub fn at(self, k: u32, u: &Jet) -> Jet {
        let u0 = u.value();
        let mut derivs = [0.0; GENS + 1];
        for (m, slot) in derivs.iter_mut().enumerate() {
            *slot = self.derivative(k + m as u32, u0);
        }
        u.compose(&derivs)
    }
}

fn factorial(n: i32) -> f64 {
    (1..=n).map(f64::from).product()
}

fn binomial(n: i32, k: i32) -> f64 {
    factorial(n) / (factorial(k) * factorial(n - k))
}

// ───────────────────────── the model ─────────────────────────

/// How a derivative `∂[i](p) { body }` is evaluated.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Differentiate {
    /// Forward mode: seed p[i] with a fresh infinitesimal.
    Jets,
    /// Sixth-order central difference with step h (common practice):
    /// f' ≈ [-f(-3h) + 9f(-2h) - 45f(-h) + 45f(h) - 9f(2h) + f(3h)] / (60h).
    Differences(f64),
}

/// Numeric values for everything a term can mention. The normal direction
/// n is the last axis, n = e_{d-1} (0-based), and a point's normal
/// coordinate y is its last coordinate.
#[derive(Clone)]
pub struct Model<'a> {
    pub ctx: &'a Context,
    pub d: usize,
    pub points: BTreeMap<String, Vec<f64>>,
    /// Scalar parameters, and `d`.
    pub scalars: BTreeMap<String, f64>,
    /// Parameters with indices, flattened row-major over d^rank entries.
    pub tensors: BTreeMap<String, Vec<f64>>,
    pub functions: BTreeMap<String, Unknown>,
    pub mode: Differentiate,
    /// Per product node of the term being evaluated (by address, cleared at
    /// each `eval`): the indices contracted between its factors and which
    /// factors carry them. Saves recomputing free indices at every node for
    /// every value of the summed indices.
    plans: std::cell::RefCell<std::collections::HashMap<usize, std::rc::Rc<Plan>>>,
}

struct Plan {
    bound: Vec<String>,
    carries: Vec<bool>,
}

/// The state of one evaluation: coordinates as jets, values of the indices
/// in scope, and the next free infinitesimal.
#[derive(Clone)]
struct Env {
    coords: BTreeMap<String, Vec<Jet>>,
    indices: BTreeMap<String, usize>,
    depth: usize,
    /// The unit outward normal on the sphere of a surface integral.
    normal: Vec<f64>,
}

impl<'a> Model<'a> {
    /// A random model of the declarations of `ctx` in dimension `d`: bulk
    /// points at least `min_sep` apart (with y in [0.3, 1.3] next to a
    /// wall, in the unit cube otherwise), boundary points on y = 0, scalar
    /// parameters in [0.4, 1.6], components of vectors and tensors in
    /// [-1, 1] (zero normal components for parallel ones, ω antisymmetric),
    /// and F(u) = exp(-u) for every unknown function.
    pub fn random(ctx: &'a Context, d: usize, rng: &mut SplitMix64) -> Model<'a> {
        let wall = ctx.has_halfspace();
        let min_sep = 0.5;
        let mut points: BTreeMap<String, Vec<f64>> = BTreeMap::new();
        for p in &ctx.points {
            let v = loop {
                let mut v: Vec<f64> = (0..d).map(|_| rng.uniform(-1.0, 1.0)).collect();
                if wall {
                    v[d - 1] = if p.boundary {
                        0.0
                    } else {
                        rng.uniform(0.3, 1.3)
                    };
                }
                let far = points.values().all(|q| {
                    v.iter()
                        .zip(q)
                        .map(|(a, b)| (a - b) * (a - b))
                        .sum::<f64>()
                        .sqrt()
                        > min_sep
                });
                if far {
                    break v;
                }
            };
            points.insert(p.name.clone(), v);
        }
        let mut scalars = BTreeMap::new();
        for s in &ctx.parameters {
            scalars.insert(s.clone(), rng.uniform(0.4, 1.6));
        }
        scalars.insert("d".to_string(), d as f64);
        let mut tensors = BTreeMap::new();
        for (name, decl) in &ctx.params {
            let len = d.pow(decl.rank as u32);
            let mut t = vec![0.0; len];
            for (flat, slot) in t.iter_mut().enumerate() {
                let mut idx = Vec::with_capacity(decl.rank);
                let mut f = flat;
                for _ in 0..decl.rank {
                    idx.push(f % d);
                    f /= d;
                }
                idx.reverse();
                if decl.parallel && idx.contains(&(d - 1)) {
                    continue;
                }
                if decl.antisymmetric && decl.rank == 2 && idx[0] >= idx[1] {
                    continue;
                }
                *slot = rng.uniform(-1.0, 1.0);
            }
            if decl.antisymmetric && decl.rank == 2 {
                for i in 0..d {
                    for j in 0..i {
                        t[i * d + j] = -t[j * d + i];
                    }
                }
            }
            tensors.insert(name.clone(), t);
        }
        let functions = ctx
            .functions
            .iter()
            .map(|f| (f.clone(), Unknown::ExpMinus))
            .collect();
        Model {
            ctx,
            d,
            points,
            scalars,
            tensors,
            functions,
            mode: Differentiate::Jets,
            plans: Default::default(),
        }
    }

    /// Sets a scalar parameter.
    pub fn set(&mut self, name: &str, v: f64) {
        assert!(
            self.scalars.contains_key(name),
            "no scalar parameter {name}"
        );
        self.scalars.insert(name.to_string(), v);
    }

    /// The coordinates of a point (its projection for `par`).
    pub fn at(&self, p: &str) -> Vec<f64> {
        self.points
            .get(p)
            .unwrap_or_else(|| panic!("no point {p}"))
            .clone()
    }

    /// The component of a parameter vector or tensor.
    pub fn tensor(&self, name: &str, idx: &[usize]) -> f64 {
        let t = &self.tensors[name];
        let flat = idx.iter().fold(0, |acc, i| acc * self.d + i);
        t[flat]
    }

    /// The value of `t` with its free indices set by `indices`; repeated
    /// indices are summed.
    pub fn eval(&self, t: &Term, indices: &[(&str, usize)]) -> f64 {
        self.plans.borrow_mut().clear();
        let env = Env {
            coords: self
                .points
                .iter()
                .map(|(k, v)| (k.clone(), v.iter().map(|x| Jet::constant(*x)).collect()))
                .collect(),
            indices: indices.iter().map(|(k, v)| (k.to_string(), *v)).collect(),
            depth: 0,
            normal: Vec::new(),
        };
        for name in free_indices(t) {
            assert!(
                env.indices.contains_key(&name),
                "free index {name} has no value"
            );
        }
        self.term(t, &env).value()
    }

    fn range(&self, name: &str) -> std::ops::Range<usize> {
        match self.ctx.index_kind(name) {
            IndexKind::Bulk => 0..self.d,
            IndexKind::Parallel => 0..self.d - 1,
        }
    }

    fn component(&self, i: &Index, env: &Env) -> usize {
        match i {
            Index::N => self.d - 1,
            Index::Named(s) => *env
                .indices
                .get(s)
                .unwrap_or_else(|| panic!("index {s} has no value")),
        }
    }

    fn coordinate(&self, p: &Point, k: usize, env: &Env) -> Jet {
        // The origin's coordinates are 0 (|p| is its distance to p).
        if p.is_origin() || (k == self.d - 1 && (p.par || self.ctx.is_boundary_point(p))) {
            return Jet::zero();
        }
        env.coords
            .get(&*p.name)
            .unwrap_or_else(|| panic!("point {} has no value", p.name))[k]
    }

    /// Sums `f` over every assignment of the `bound` indices.
    fn sum_over(&self, bound: &[String], env: &Env, f: &dyn Fn(&Env) -> Jet) -> Jet {
        let Some((first, rest)) = bound.split_first() else {
            return f(env);
        };
        let mut total = Jet::zero();
        for v in self.range(first) {
            let mut inner = env.clone();
            inner.indices.insert(first.clone(), v);
            total = total.add(&self.sum_over(rest, &inner, f));
        }
        total
    }

    fn term(&self, t: &Term, env: &Env) -> Jet {
        match t {
            Term::Num(c) => Jet::constant(to_f64(c)),
            Term::Sym(s) => Jet::constant(
                *self
                    .scalars
                    .get(s)
                    .unwrap_or_else(|| panic!("no value for {s}")),
            ),
            Term::Pow(a, b) => {
                let bound = contracted(&[a, b]);
                self.sum_over(&bound, env, &|e| self.term(a, e).pow(&self.term(b, e)))
            }
            Term::Mul(ts) => {
                let key = t as *const Term as usize;
                let cached = self.plans.borrow().get(&key).cloned();
                let plan = cached.unwrap_or_else(|| {
                    let refs: Vec<&Term> = ts.iter().collect();
                    let bound = contracted(&refs);
                    let carries = ts
                        .iter()
                        .map(|f| free_indices(f).iter().any(|i| bound.contains(i)))
                        .collect();
                    let plan = std::rc::Rc::new(Plan { bound, carries });
                    self.plans.borrow_mut().insert(key, plan.clone());
                    plan
                });
                // Factors free of the summed indices come out of the sum.
                let outside = ts
                    .iter()
                    .zip(&plan.carries)
                    .filter(|(_, c)| !**c)
                    .fold(Jet::constant(1.0), |acc, (f, _)| {
                        acc.mul(&self.term(f, env))
                    });
                if plan.bound.is_empty() {
                    return outside;
                }
                outside.mul(&self.sum_over(&plan.bound, env, &|e| {
                    ts.iter()
                        .zip(&plan.carries)
                        .filter(|(_, c)| **c)
                        .fold(Jet::constant(1.0), |acc, (f, _)| acc.mul(&self.term(f, e)))
                }))
            }
            Term::Add(ts) => ts
                .iter()
                .fold(Jet::zero(), |acc, s| acc.add(&self.term(s, env))),
            Term::Dist(p, q) => {
                let mut s = Jet::zero();
                for k in 0..self.d {
                    let diff = self.coordinate(p, k, env).sub(&self.coordinate(q, k, env));
                    s = s.add(&diff.mul(&diff));
                }
                s.sqrt()
            }
            Term::Fun(..) if t.as_hyp2f1().is_some() => {
                // ₂F₁^(k) composed with its argument's jet; its derivatives
                // from numeric::special (DLMF 15.5.2 for the k-th).
                let Some(([a, b, c, z], k)) = t.as_hyp2f1() else {
                    unreachable!()
                };
                let [a, b, c] = [a, b, c].map(|p| self.term(p, env).value());
                let z = self.term(z, env);
                let mut derivs = [0.0; GENS + 1];
                for (m, slot) in derivs.iter_mut().enumerate() {
                    *slot = hyp2f1_derivative(a, b, c, z.value(), k + m as u32);
                }
                z.compose(&derivs)
            }
            Term::Fun(_, orders, args) if args.len() == 2 => {
                // A function of two variables: F(u, v) = exp(-u)/(1 + v),
                // ∂_u^i ∂_v^j F = (-1)^(i+j) j! exp(-u) (1 + v)^(-1-j).
                let (u, v) = (self.term(&args[0], env), self.term(&args[1], env));
                let (i, j) = (orders[0], orders[1]);
                let sign = if (i + j) % 2 == 0 { 1.0 } else { -1.0 };
                let factorial: f64 = (1..=j).map(f64::from).product();
                u.scale(-1.0)
                    .exp()
                    .mul(&v.add(&Jet::constant(1.0)).powf(-1.0 - f64::from(j)))
                    .scale(sign * factorial)
            }
            Term::Fun(name, orders, args) => {
                let ([arg], [order]) = (&args[..], &orders[..]) else {
                    panic!("unknown functions take one or two arguments here: {t:?}")
                };
                let f = self
                    .functions
                    .get(name)
                    .unwrap_or_else(|| panic!("no choice for the function {name}"));
                f.at(*order, &self.term(arg, env))
            }
            Term::Comp(p, i) => {
                let bound = leaf_contracted(std::slice::from_ref(i));
                assert!(bound.is_empty());
                self.coordinate(p, self.component(i, env), env)
            }
            Term::Param(name, idx) => {
                let bound = leaf_contracted(idx);
                self.sum_over(&bound, env, &|e| {
                    let comps: Vec<usize> = idx.iter().map(|i| self.component(i, e)).collect();
                    Jet::constant(self.tensor(name, &comps))
                })
            }
            Term::Normal(i) => {
                Jet::constant(f64::from(u8::from(self.component(i, env) == self.d - 1)))
            }
            Term::Kron(i, j) => {
                let bound = leaf_contracted(&[i.clone(), j.clone()]);
                self.sum_over(&bound, env, &|e| {
                    Jet::constant(f64::from(u8::from(
                        self.component(i, e) == self.component(j, e),
                    )))
                })
            }
            Term::Der(i, p, body) => {
                assert!(!p.par, "derivative along a projection: {t:?}");
                let bound: Vec<String> = match i {
                    Index::Named(s) if free_indices(body).contains(s) => vec![s.clone()],
                    _ => vec![],
                };
                self.sum_over(&bound, env, &|e| self.derivative(i, p, body, e))
            }
            Term::Integral(integral) => self.integral(integral, env),
            Term::Corr(ops) => {
                // A smooth, symmetric model correlator of scalar insertions:
                // Π_{i<j} (1 + |p_i - p_j|²)^(-(w_i + w_j)/2) Π_i (1 + y_i²)^(-w_i/3),
                // with a weight w per operator name. It stands for any
                // smooth function; the checks here do not depend on it.
                let weight = |name: &str| {
                    0.6 + f64::from(name.bytes().map(u32::from).sum::<u32>() % 7) / 10.0
                };
                let mut out = Jet::constant(1.0);
                for (a, oa) in ops.iter().enumerate() {
                    assert!(oa.indices.is_empty(), "only scalar insertions: {t:?}");
                    let y = self.coordinate(&oa.point, self.d - 1, env);
                    out = out.mul(
                        &Jet::constant(1.0)
                            .add(&y.mul(&y))
                            .powf(-weight(&oa.name) / 3.0),
                    );
                    for ob in &ops[a + 1..] {
                        let mut s = Jet::constant(1.0);
                        for k in 0..self.d {
                            let diff = self
                                .coordinate(&oa.point, k, env)
                                .sub(&self.coordinate(&ob.point, k, env));
                            s = s.add(&diff.mul(&diff));
                        }
                        out = out.mul(&s.powf(-(weight(&oa.name) + weight(&ob.name)) / 2.0));
                    }
                }
                out
            }
            Term::DeltaFn(..) | Term::DeltaY(_) => {
                panic!("a δ-function has no value at a point: {t:?}")
            }
            Term::OutNormal(i) => {
                assert!(
                    !env.normal.is_empty(),
                    "the outward normal N outside a surface integral"
                );
                Jet::constant(env.normal[self.component(i, env)])
            }
        }
    }

    /// ∂[i](p) { body } at fixed i.
    fn derivative(&self, i: &Index, p: &Point, body: &Term, env: &Env) -> Jet {
        let k = self.component(i, env);
        if k == self.d - 1 && self.ctx.is_boundary_point(p) {
            // Boundary points move only along the boundary.
            return Jet::zero();
        }
        match self.mode {
            Differentiate::Jets => {
                let g = env.depth;
                assert!(g < GENS, "derivatives nested deeper than {GENS}");
                let mut inner = env.clone();
                inner.depth += 1;
                let x = &mut inner.coords.get_mut(&*p.name).expect("point has a value")[k];
                *x = x.seeded(g);
                self.term(body, &inner).along(g)
            }
            Differentiate::Differences(h) => {
                let shifted = |s: f64| {
                    let mut inner = env.clone();
                    let x = &mut inner.coords.get_mut(&*p.name).expect("point has a value")[k];
                    *x = x.add(&Jet::constant(s * h));
                    self.term(body, &inner)
                };
                let weights = [
                    (-3.0, -1.0),
                    (-2.0, 9.0),
                    (-1.0, -45.0),
                    (1.0, 45.0),
                    (2.0, -9.0),
                    (3.0, 1.0),
                ];
                weights
                    .iter()
                    .fold(Jet::zero(), |acc, (s, w)| acc.add(&shifted(*s).scale(*w)))
                    .scale(1.0 / (60.0 * h))
            }
        }
    }

    /// A volume integral whose body carries δ(var - q): by the definition
    /// of δ, the rest of the body at var = q when q lies inside the region,
    /// and zero when it lies outside (decided from the numbers).
    fn integral(&self, i: &Integral, env: &Env) -> Jet {
        if i.surface {
            return self.sphere_integral(i, env);
        }
        if let Term::Add(ts) = &i.body {
            // Linearity.
            return ts.iter().fold(Jet::zero(), |acc, t| {
                let part = Integral {
                    body: t.clone(),
                    ..i.clone()
                };
                acc.add(&self.integral(&part, env))
            });
        }
        let mut factors: Vec<&Term> = Vec::new();
        flatten(&i.body, &mut factors);
        let position = factors
            .iter()
            .position(|f| matches!(f, Term::DeltaFn(a, b) if a.name == i.var.name || b.name == i.var.name))
            .unwrap_or_else(|| panic!("the oracle integrates only against δ(x - p): {i:?}"));
        let Term::DeltaFn(a, b) = factors[position] else {
            unreachable!()
        };
        let target = if a.name == i.var.name { b } else { a };
        let q: Vec<Jet> = (0..self.d)
            .map(|k| self.coordinate(target, k, env))
            .collect();
        let inside = match &i.region {
            Region::Space => true,
            Region::Halfspace => q[self.d - 1].value() >= 0.0,
            Region::Boundary => panic!("boundary-plane integrals are not evaluated"),
            Region::Ball(c, r) => {
                let r = self.term(r, env).value();
                let dist = (0..self.d)
                    .map(|k| {
                        let diff = q[k].value() - self.coordinate(c, k, env).value();
                        diff * diff
                    })
                    .sum::<f64>()
                    .sqrt();
                assert!(
                    (dist - r).abs() > 1e-6 * r,
                    "{} lies on the surface of the ball",
                    target.name
                );
                dist < r
            }
        };
        if !inside {
            return Jet::zero();
        }
        let rest: Vec<Term> = factors
            .iter()
            .enumerate()
            .filter(|(k, _)| *k != position)
            .map(|(_, f)| (*f).clone())
            .collect();
        let mut inner = env.clone();
        inner.coords.insert(i.var.name.to_string(), q);
        self.term(&Term::Mul(rest), &inner)
    }
}

impl Model<'_> {
    /// ∮ over the sphere of a ball around a bulk point, d = 2, 3, 4: the
    /// product rule of `support::sphere_rule` (10 × 20 nodes in d = 3, 6 × 12 × 12
    /// in d = 4; accurate when the sphere stays well inside the region where
    /// the body is smooth),
    /// with N the unit outward normal.
    fn sphere_integral(&self, i: &Integral, env: &Env) -> Jet {
        let Region::Ball(center, radius) = &i.region else {
            panic!("surface integrals only over spheres")
        };
        assert!(
            !self.ctx.is_boundary_point(center) && (2..=4).contains(&self.d),
            "hemispheres and d > 4 are not evaluated"
        );
        let r = self.term(radius, env);
        let c: Vec<Jet> = (0..self.d)
            .map(|k| self.coordinate(center, k, env))
            .collect();
        let mut total = Jet::zero();
        let (n, m) = if self.d == 4 { (6, 12) } else { (10, 20) };
        for (u, w) in crate::support::sphere_rule(self.d, n, m) {
            let mut inner = env.clone();
            let at: Vec<Jet> = (0..self.d).map(|k| c[k].add(&r.scale(u[k]))).collect();
            inner.coords.insert(i.var.name.to_string(), at);
            inner.normal = u[..self.d].to_vec();
            total = total.add(&self.term(&i.body, &inner).scale(w));
        }
        total.mul(&r.powf(self.d as f64 - 1.0))
    }
}

/// The factors of nested products.
fn flatten<'t>(t: &'t Term, out: &mut Vec<&'t Term>) {
    match t {
        Term::Mul(fs) => fs.iter().for_each(|f| flatten(f, out)),
        f => out.push(f),
    }
}

pub fn to_f64(c: &BigRational) -> f64 {
    c.numer().to_f64().expect("numerator") / c.denom().to_f64().expect("denominator")
}

// ───────────────────────── indices ─────────────────────────

/// Named indices that occur exactly once in the concatenation.
fn once(all: Vec<String>) -> Vec<String> {
    let mut counts: BTreeMap<String, usize> = BTreeMap::new();
    for s in &all {
        *counts.entry(s.clone()).or_insert(0) += 1;
    }
    for (s, n) in &counts {
        assert!(*n <= 2, "index {s} occurs {n} times");
    }
    counts
        .into_iter()
        .filter(|(_, n)| *n == 1)
        .map(|(s, _)| s)
        .collect()
}

/// Named indices that occur twice in the concatenation: summed there.
fn twice(all: Vec<String>) -> Vec<String> {
    let mut counts: BTreeMap<String, usize> = BTreeMap::new();
    for s in all {
        *counts.entry(s).or_insert(0) += 1;
    }
    counts
        .into_iter()
        .filter(|(_, n)| *n == 2)
        .map(|(s, _)| s)
        .collect()
}

fn names(idx: &[Index]) -> Vec<String> {
    idx.iter()
        .filter_map(|i| i.name().map(String::from))
        .collect()
}

fn leaf_contracted(idx: &[Index]) -> Vec<String> {
    twice(names(idx))
}

/// Indices contracted between the children of one node.
fn contracted(children: &[&Term]) -> Vec<String> {
    twice(children.iter().flat_map(|c| free_indices(c)).collect())
}

/// The free indices of a term, sorted.
pub fn free_indices(t: &Term) -> Vec<String> {
    match t {
        Term::Num(_) | Term::Sym(_) | Term::Dist(..) | Term::DeltaFn(..) | Term::DeltaY(_) => {
            vec![]
        }
        Term::Comp(_, i) | Term::Normal(i) | Term::OutNormal(i) => names(std::slice::from_ref(i)),
        Term::Kron(i, j) => once(names(&[i.clone(), j.clone()])),
        Term::Param(_, idx) => once(names(idx)),
        Term::Pow(a, b) => once([free_indices(a), free_indices(b)].concat()),
        Term::Mul(ts) => once(ts.iter().flat_map(free_indices).collect()),
        Term::Fun(_, _, args) => once(args.iter().flat_map(free_indices).collect()),
        Term::Add(ts) => {
            let first = ts.first().map(free_indices).unwrap_or_default();
            for s in ts {
                assert_eq!(
                    free_indices(s),
                    first,
                    "summands with different free indices"
                );
            }
            first
        }
        Term::Der(i, _, body) => {
            once([names(std::slice::from_ref(i)), free_indices(body)].concat())
        }
        Term::Corr(ops) => once(ops.iter().flat_map(|o| names(&o.indices)).collect()),
        Term::Integral(i) => free_indices(&i.body),
    }
}

/// Every assignment of values to the named free indices of `t`.
pub fn assignments(ctx: &Context, d: usize, free: &[String]) -> Vec<Vec<(String, usize)>> {
    let mut out = vec![vec![]];
    for name in free {
        let range = match ctx.index_kind(name) {
            IndexKind::Bulk => 0..d,
            IndexKind::Parallel => 0..d - 1,
        };
        out = out
            .into_iter()
            .flat_map(|a: Vec<(String, usize)>| {
                range.clone().map(move |v| {
                    let mut b = a.clone();
                    b.push((name.clone(), v));
                    b
                })
            })
            .collect();
    }
    out
}

/// True if every derivative left in `t` acts on a correlator (possibly
/// through other derivatives): the engine has differentiated every
/// explicit function itself.
pub fn derivatives_only_on_correlators(t: &Term) -> bool {
    match t {
        Term::Der(_, _, body) => {
            let mut inner: &Term = body;
            while let Term::Der(_, _, b) = inner {
                inner = b;
            }
            matches!(inner, Term::Corr(_))
        }
        Term::Pow(a, b) => derivatives_only_on_correlators(a) && derivatives_only_on_correlators(b),
        Term::Mul(ts) | Term::Add(ts) | Term::Fun(_, _, ts) => {
            ts.iter().all(derivatives_only_on_correlators)
        }
        Term::Integral(i) => derivatives_only_on_correlators(&i.body),
        _ => true,
    }
}

/// The k-th z-derivative of ₂F₁(a, b; c; z):
/// (a)_k (b)_k/(c)_k ₂F₁(a + k, b + k; c + k; z) (DLMF 15.5.2).
pub fn hyp2f1_derivative(a: f64, b: f64, c: f64, z: f64, k: u32) -> f64 {
    let mut factor = 1.0;
    for j in 0..k {
        let j = f64::from(j);
        factor *= (a + j) * (b + j) / (c + j);
    }
    let k = f64::from(k);
    factor
        * wardsmith::numeric::special::hyp2f1(a + k, b + k, c + k, z)
            .unwrap_or_else(|e| panic!("₂F₁({a}, {b}; {c}; {z}): {e}"))
}
