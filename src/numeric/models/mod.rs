//! Models: correlators as explicit terms.
//!
//! A [`Model`] turns a correlator ⟨O_1(x_1) … O_n(x_n)⟩ into an explicit
//! function of the points: a [`Term`] built from distances, coordinates,
//! powers, sums, products, numbers, symbols, Kronecker deltas and the unit
//! normal, with no correlator left in it. [`apply`] does this for every
//! correlator of a term, so that a derivative of a correlator becomes a
//! derivative of an explicit function, which the normaliser differentiates
//! symbolically; `numeric::eval` then turns the result into numbers.
//!
//! Two families are provided:
//!
//! - [`conformal::Conformal`]: fixed conformal forms with declared
//!   coefficients (two- and three-point functions of scalars, ⟨T O O⟩,
//!   ⟨T T⟩, and with a wall the one-point, bulk-to-boundary, boundary
//!   two-point functions and ⟨T O⟩), docs/conventions.md §3 and §4;
//! - [`free_scalar::FreeScalar`]: the free scalar in R^d or next to a
//!   Neumann or Dirichlet wall, composites by Wick contraction with the
//!   propagator by images, docs/conventions.md §4.
//!
//! The area of the unit sphere S_d = 2π^{d/2}/Γ(d/2) is not rational; models
//! write it as the symbol [`SPHERE_AREA`], which a numeric evaluation binds
//! to [`sphere_area`] of the dimension.
//!
//! Summed indices a model introduces are renamed by [`apply`] to names of the
//! form `κm1`, `κm2`, … that occur nowhere else in the term, so that two
//! correlators in one product never share a summation index.

pub mod conformal;
pub mod free_scalar;
pub mod gff;
mod propagator;

use std::collections::{BTreeMap, BTreeSet};

use crate::context::Context;
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::term::{Index, Integral, Op, Point, Region, Term};

/// Name of the symbol standing for S_d, the area of the unit sphere S^{d-1}.
pub use crate::context::SPHERE_AREA;

/// S_d = 2 π^{d/2} / Γ(d/2) for a whole dimension d ≥ 1, by the recursion
/// S_{d+2} = 2π S_d / d from S_1 = 2, S_2 = 2π (common practice).
pub fn sphere_area(d: usize) -> f64 {
    use std::f64::consts::PI;
    match d {
        0 => 0.0,
        1 => 2.0,
        2 => 2.0 * PI,
        _ => 2.0 * PI * sphere_area(d - 2) / (d - 2) as f64,
    }
}

/// A source of explicit correlators.
pub trait Model {
    /// The correlator as an explicit term, or an error saying which
    /// insertion (or combination) this model does not know.
    fn correlator(&self, ctx: &Context, ops: &[Op]) -> Result<Term>;

    /// One line saying what the model is and which conventions it uses
    /// (boundary condition, normalisation of one-point functions, …), for
    /// reports.
    fn describe(&self) -> String {
        String::from("a model")
    }

    /// True if the model's correlator of these insertions was built with
    /// derivatives taken pointwise (composites with derivatives of fields):
    /// it holds away from coincident insertions only, and a symbolic proof
    /// through it says so.
    fn pointwise_inside(&self, _ops: &[Op]) -> bool {
        false
    }
}

/// The pairs of distinct points inserted together in some correlator of a
/// term whose model correlator is pointwise inside.
pub fn pointwise_pairs(model: &dyn Model, t: &Term) -> Vec<(Point, Point)> {
    let mut out = Vec::new();
    visit_correlators(t, &mut |ops| {
        if model.pointwise_inside(ops) {
            for (k, a) in ops.iter().enumerate() {
                for b in &ops[k + 1..] {
                    if a.point.name != b.point.name {
                        out.push((a.point.clone(), b.point.clone()));
                    }
                }
            }
        }
    });
    out
}

fn visit_correlators(t: &Term, f: &mut dyn FnMut(&[Op])) {
    match t {
        Term::Corr(ops) => f(ops),
        Term::Pow(a, b) => {
            visit_correlators(a, f);
            visit_correlators(b, f);
        }
        Term::Mul(ts) | Term::Add(ts) | Term::Fun(_, _, ts) => {
            ts.iter().for_each(|t| visit_correlators(t, f))
        }
        Term::Der(_, _, body) => visit_correlators(body, f),
        Term::Integral(i) => visit_correlators(&i.body, f),
        _ => {}
    }
}

/// Replaces every correlator in a term by the model's explicit function.
///
/// This is a tree pass: `Der(i, p, Corr)` becomes `Der(i, p, explicit)` for
/// the normaliser to differentiate, and correlators inside integrals,
/// powers and function arguments are replaced as well. Summed indices of
/// each replacement are renamed apart from every index of the term.
pub fn apply(model: &dyn Model, ctx: &Context, t: &Term) -> Result<Term> {
    let mut used = BTreeSet::new();
    index_names(t, &mut used);
    let mut pass = Apply {
        model,
        ctx,
        used,
        next: 1,
    };
    pass.term(t)
}

struct Apply<'a> {
    model: &'a dyn Model,
    ctx: &'a Context,
    /// Every index name in use, including the fresh ones handed out.
    used: BTreeSet<String>,
    next: usize,
}

impl Apply<'_> {
    fn fresh(&mut self) -> String {
        loop {
            let name = format!("κm{}", self.next);
            self.next += 1;
            if self.used.insert(name.clone()) {
                return name;
            }
        }
    }

    fn term(&mut self, t: &Term) -> Result<Term> {
        Ok(match t {
            Term::Corr(ops) => {
                let explicit = self.model.correlator(self.ctx, ops)?;
                // Every index of the explicit term that is not an index of an
                // insertion is summed inside it: rename it apart.
                let mut own = BTreeSet::new();
                for op in ops {
                    for i in &op.indices {
                        if let Index::Named(n) = i {
                            own.insert(n.clone());
                        }
                    }
                }
                let mut inner = BTreeSet::new();
                index_names(&explicit, &mut inner);
                let mut map = BTreeMap::new();
                for name in inner.difference(&own) {
                    let fresh = self.fresh();
                    map.insert(name.clone(), Index::Named(fresh));
                }
                rename_indices(&explicit, &map)
            }
            Term::Pow(a, b) => Term::Pow(Box::new(self.term(a)?), Box::new(self.term(b)?)),
            Term::Mul(ts) => Term::Mul(self.all(ts)?),
            Term::Add(ts) => Term::Add(self.all(ts)?),
            Term::Fun(name, orders, args) => {
                Term::Fun(name.clone(), orders.clone(), self.all(args)?)
            }
            Term::Der(i, p, body) => Term::Der(i.clone(), p.clone(), Box::new(self.term(body)?)),
            Term::Integral(integral) => {
                let region = match &integral.region {
                    Region::Ball(c, r) => Region::Ball(c.clone(), self.term(r)?),
                    other => other.clone(),
                };
                Term::Integral(Box::new(Integral {
                    var: integral.var.clone(),
                    region,
                    surface: integral.surface,
                    body: self.term(&integral.body)?,
                }))
            }
            Term::Num(_)
            | Term::Sym(_)
            | Term::Dist(..)
            | Term::Comp(..)
            | Term::Param(..)
            | Term::DeltaFn(..)
            | Term::DeltaY(_)
            | Term::Normal(_)
            | Term::Kron(..)
            | Term::OutNormal(_) => t.clone(),
        })
    }

    fn all(&mut self, ts: &[Term]) -> Result<Vec<Term>> {
        ts.iter().map(|t| self.term(t)).collect()
    }
}

/// Every named index anywhere in a term.
pub(crate) fn index_names(t: &Term, out: &mut BTreeSet<String>) {
    let mut add = |i: &Index| {
        if let Index::Named(n) = i {
            out.insert(n.clone());
        }
    };
    match t {
        Term::Comp(_, i) | Term::Normal(i) | Term::OutNormal(i) => add(i),
        Term::Kron(i, j) => {
            add(i);
            add(j);
        }
        Term::Param(_, indices) => indices.iter().for_each(add),
        Term::Corr(ops) => ops.iter().flat_map(|o| &o.indices).for_each(add),
        Term::Der(i, _, body) => {
            add(i);
            index_names(body, out);
        }
        Term::Pow(a, b) => {
            index_names(a, out);
            index_names(b, out);
        }
        Term::Mul(ts) | Term::Add(ts) | Term::Fun(_, _, ts) => {
            ts.iter().for_each(|t| index_names(t, out));
        }
        Term::Integral(i) => {
            if let Region::Ball(_, r) = &i.region {
                index_names(r, out);
            }
            index_names(&i.body, out);
        }
        Term::Num(_) | Term::Sym(_) | Term::Dist(..) | Term::DeltaFn(..) | Term::DeltaY(_) => {}
    }
}

/// The number of nodes of a term (the measure of the Wick budget,
/// [`crate::budget::MAX_WICK`]).
pub(crate) fn node_count(t: &Term) -> usize {
    1 + match t {
        Term::Pow(a, b) => node_count(a) + node_count(b),
        Term::Mul(ts) | Term::Add(ts) | Term::Fun(_, _, ts) => ts.iter().map(node_count).sum(),
        Term::Der(_, _, body) => node_count(body),
        Term::Integral(i) => node_count(&i.body),
        Term::Corr(ops) => ops.len(),
        _ => 0,
    }
}

/// Renames named indices simultaneously, anywhere in a term.
pub(crate) fn rename_indices(t: &Term, map: &BTreeMap<String, Index>) -> Term {
    if map.is_empty() {
        return t.clone();
    }
    let r = |i: &Index| match i {
        Index::Named(n) => map.get(n).cloned().unwrap_or_else(|| i.clone()),
        Index::N => Index::N,
    };
    t.map(&|p| p.clone(), &r, None)
}

/// Replaces points by name, anywhere in a term (the replacement keeps its
/// own `par` flag and rank).
pub(crate) fn substitute_points(t: &Term, map: &BTreeMap<crate::term::Name, Point>) -> Term {
    let p = |q: &Point| map.get(&q.name).cloned().unwrap_or_else(|| q.clone());
    t.map(&p, &|i| i.clone(), None)
}

// ───────────────────────── building terms ─────────────────────────

pub(crate) fn rational(n: i64, d: i64) -> Term {
    Term::Num(num_rational::BigRational::new(n.into(), d.into()))
}

pub(crate) fn mul(ts: Vec<Term>) -> Term {
    Term::Mul(ts)
}

pub(crate) fn add(ts: Vec<Term>) -> Term {
    Term::Add(ts)
}

pub(crate) fn neg(t: Term) -> Term {
    t.negated()
}

pub(crate) fn pow(base: Term, e: Term) -> Term {
    Term::Pow(Box::new(base), Box::new(e))
}

pub(crate) fn inv(t: Term) -> Term {
    pow(t, Term::int(-1))
}

/// a - b.
pub(crate) fn minus(a: Term, b: Term) -> Term {
    add(vec![a, neg(b)])
}

/// |p - q|^e.
pub(crate) fn dist_pow(p: &Point, q: &Point, e: Term) -> Term {
    pow(Term::Dist(p.clone(), q.clone()), e)
}

/// The normal coordinate y of a point.
pub(crate) fn normal_coord(p: &Point) -> Term {
    Term::Comp(p.clone(), Index::N)
}

/// (p - q)_i.
pub(crate) fn difference(p: &Point, q: &Point, i: &Index) -> Term {
    minus(
        Term::Comp(p.clone(), i.clone()),
        Term::Comp(q.clone(), i.clone()),
    )
}

/// The symbol S_d.
pub(crate) fn sphere() -> Term {
    Term::Sym(SPHERE_AREA.to_string())
}

/// An error of a model, with the insertions it was asked about.
pub(crate) fn unknown(model: &str, ops: &[Op], why: impl Into<String>) -> Error {
    let list: Vec<String> = ops.iter().map(describe_op).collect();
    Error::new(
        ErrorKind::Unsupported,
        format!(
            "the {model} model does not know ⟨{}⟩: {}",
            list.join(" "),
            why.into()
        ),
    )
}

/// An insertion as written: `T[mu,nu](x)`.
pub(crate) fn describe_op(op: &Op) -> String {
    let point = if op.point.par {
        format!("{}∥", op.point.name)
    } else {
        op.point.name.to_string()
    };
    if op.indices.is_empty() {
        format!("{}({point})", op.name)
    } else {
        let idx: Vec<&str> = op.indices.iter().map(|i| i.name().unwrap_or("n")).collect();
        format!("{}[{}]({point})", op.name, idx.join(","))
    }
}
