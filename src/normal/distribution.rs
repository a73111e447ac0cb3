//! Derivatives of explicit functions as distributions.
//!
//! An explicit function of x that is singular at a point p (a power of
//! |x - p|, or anything carrying one) is a distribution in x, and its
//! derivative is the pointwise derivative plus δ-function terms at p
//! (common practice). When the function G has local degree at least
//! 1 - d at p (no term of its expansion at p is more singular than
//! |x - p|^(1-d)), it is locally integrable, its pointwise derivative has
//! degree at least -d (with vanishing sphere average, so it is a principal
//! value), and
//!
//!   ∂_i G = {∂_i G} + δ(x - p) ∮ dΩ u_i G_(1-d)(u),
//!
//! the δ coefficient being the flux of G through a small sphere around p
//! ([`super::local`]). Otherwise — a lower degree, a degree whose sign
//! depends on symbols such as Δ, an unknown function of x and p, a sum
//! carried to a power that may vanish — the contact terms at p depend on
//! a scheme or are not known, and the result holds only away from x = p:
//! the derivative is taken pointwise and a [`Coincidence`] records where.
//!
//! Explicit functions of a bulk point are distributions in the open
//! half-space y > 0 (where the models are defined): singularities on the
//! wall carry no contact terms here; what the wall contributes comes from
//! T extended by zero, through the Ward rules and δ(y(x)). Along the wall
//! (a derivative at a boundary point) the contact terms of a singularity
//! at another boundary point are not computed: they are recorded as a
//! coincidence unless the function is regular enough to need none.

use std::collections::BTreeSet;

use num_rational::BigRational;
use num_traits::{Signed, Zero};

use super::local::{self, Local, Sphere};
use super::{calculus, expand, Mono, Norm};
use crate::context::Context;
use crate::diagnostic::Result;
use crate::term::{Index, Point, Term};

/// Where a derivative of an explicit function was taken only pointwise.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Coincidence {
    /// The point that was differentiated.
    pub var: Point,
    pub at: Singular,
}

/// The set a result is not established on.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Singular {
    /// The coincidence `var` = this point.
    Point(Point),
    /// Where this scalar expression vanishes.
    Zeros(Term),
}

/// Every coincidence a normalisation met, in a fixed order.
pub type Caveats = BTreeSet<Coincidence>;

/// ∂[i](x) of a sum of monomials, as a distribution in x.
pub fn differentiate(cx: &Norm, i: &Index, x: &Point, body: Vec<Mono>) -> Result<Vec<Mono>> {
    let contact = if cx.pointwise {
        Vec::new()
    } else {
        contact_terms(cx, i, x, &body)?
    };
    let mut out = Vec::new();
    for m in body {
        out.extend(calculus::differentiate(cx, i, x, m)?);
    }
    out.extend(contact);
    Ok(out)
}

/// How an atom that depends on x behaves.
enum Kind {
    /// Smooth wherever x may be.
    Smooth,
    /// Singular at x = p, an interior point.
    At(Point),
    /// Singular only on the wall, outside the open half-space.
    Wall,
    /// Singular on a set this module does not analyse.
    Unknown(Singular),
}

/// The δ-function terms of ∂[i](x) of the sum, and caveats where they are
/// not known.
fn contact_terms(cx: &Norm, i: &Index, x: &Point, body: &[Mono]) -> Result<Vec<Mono>> {
    let mut points: BTreeSet<Point> = BTreeSet::new();
    for m in body {
        for (atom, e) in &m.atoms {
            if !atom.mentions_point(x) {
                continue;
            }
            // A function (unknown, or ₂F₁) may be singular near every other
            // interior point its arguments name: each is a coincidence.
            if let Term::Fun(_, _, args) = atom {
                for q in function_points(cx, x, args) {
                    cx.caveat(Coincidence {
                        var: x.clone(),
                        at: Singular::Point(q),
                    });
                }
                continue;
            }
            match classify(cx, x, atom, e) {
                Kind::Smooth | Kind::Wall => {}
                Kind::At(p) => {
                    points.insert(p);
                }
                Kind::Unknown(at) => cx.caveat(Coincidence { var: x.clone(), at }),
            }
        }
    }
    let mut out = Vec::new();
    for p in points {
        out.extend(at_point(cx, i, x, &p, body)?);
    }
    Ok(out)
}

/// The contact term of ∂[i](x) at the singular point p.
fn at_point(cx: &Norm, i: &Index, x: &Point, p: &Point, body: &[Mono]) -> Result<Vec<Mono>> {
    let away = || {
        cx.caveat(Coincidence {
            var: x.clone(),
            at: Singular::Point(p.clone()),
        })
    };
    let mut singular = Vec::new();
    for m in body {
        let (exponent, _) = local::split_singular(m, x, p);
        if exponent == Term::Add(vec![Term::zero()]) {
            continue;
        }
        match near(cx, m, x, p) {
            Near::Vanishes => continue,
            Near::Product => {
                away();
                return Ok(vec![]);
            }
            Near::Smooth => singular.push(m.clone()),
        }
    }
    if singular.is_empty() {
        return Ok(vec![]);
    }
    let wall = cx.is_boundary_point(x);
    let sphere = if wall {
        Sphere::wall(cx)
    } else {
        Sphere::bulk(cx)
    };
    let Local::Orders(orders) =
        local::expand_at(cx, &sphere, &singular, x, p, &BigRational::zero())?
    else {
        away();
        return Ok(vec![]);
    };
    let mut flux = Vec::new();
    for (power, terms) in orders {
        if power.is_negative() {
            // The function is more singular than |x - p|^(1-d) unless these
            // terms cancel.
            if !local::vanishes(cx, &terms)? {
                away();
                return Ok(vec![]);
            }
        } else if power.is_zero() {
            flux = terms;
        }
    }
    if flux.is_empty() {
        return Ok(vec![]);
    }
    let along = sphere.component(cx, i)?;
    let weighted: Vec<Mono> = flux
        .iter()
        .flat_map(|m| along.iter().map(move |u| m.mul(u)))
        .collect();
    let coefficient = local::sphere_integral(cx, &sphere, &weighted)?;
    if wall {
        // Along the wall a contact term is not written out: the step holds
        // as a distribution only when there is none.
        if !super::normalize_in(cx, &super::collect(coefficient))?.is_zero() {
            away();
        }
        return Ok(vec![]);
    }
    let delta = expand(cx, &Term::DeltaFn(x.clone(), p.clone()))?;
    Ok(coefficient
        .iter()
        .flat_map(|c| delta.iter().map(move |d| c.mul(d)))
        .collect())
}

/// How a monomial singular at p behaves near p apart from the power of
/// |x - p|.
enum Near {
    /// It vanishes near p (a δ-function at another point, or on the wall).
    Vanishes,
    /// Its other factors are smooth at p.
    Smooth,
    /// Another factor is singular at p too (a δ at p, an insertion at p):
    /// the product is not a distribution this module can take apart.
    Product,
}

fn near(cx: &Norm, m: &Mono, x: &Point, p: &Point) -> Near {
    for f in &m.factors {
        match delta_in(f) {
            Some(Term::DeltaFn(a, b)) => {
                let other = if a.name == x.name { b } else { a };
                if !(a.name == x.name || b.name == x.name) {
                    continue;
                }
                if other.name == p.name {
                    return Near::Product;
                }
                return Near::Vanishes;
            }
            Some(Term::DeltaY(a)) if a.name == x.name => return Near::Vanishes,
            _ => {}
        }
        if inserts_at(f, p) && f.mentions_point(x) {
            return Near::Product;
        }
    }
    let _ = cx;
    Near::Smooth
}

/// The δ-function a factor is (possibly under derivatives).
fn delta_in(f: &Term) -> Option<&Term> {
    match f {
        Term::DeltaFn(..) | Term::DeltaY(_) => Some(f),
        Term::Der(_, _, body) => delta_in(body),
        _ => None,
    }
}

/// True if a correlator inside the factor has an insertion at p.
fn inserts_at(f: &Term, p: &Point) -> bool {
    match f {
        Term::Corr(ops) => ops.iter().any(|o| o.point.name == p.name),
        Term::Der(_, _, body) => inserts_at(body, p),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().any(|t| inserts_at(t, p)),
        Term::Integral(i) => inserts_at(&i.body, p),
        _ => false,
    }
}

fn classify(cx: &Norm, x: &Point, atom: &Term, e: &BigRational) -> Kind {
    let natural = e.is_integer() && !e.is_negative();
    match atom {
        Term::Dist(a, b) => distance(cx, x, a, b, natural && is_even(e), atom),
        Term::Pow(base, _) if matches!(**base, Term::Dist(..)) => {
            let Term::Dist(a, b) = &**base else {
                return Kind::Smooth;
            };
            distance(cx, x, a, b, false, base)
        }
        // A sum carried to a power: smooth where it is positive.
        Term::Pow(base, _) => {
            if positive(cx, base) {
                Kind::Smooth
            } else {
                Kind::Unknown(Singular::Zeros((**base).clone()))
            }
        }
        Term::Add(_) | Term::Mul(_) => {
            if natural || positive(cx, atom) {
                Kind::Smooth
            } else {
                Kind::Unknown(Singular::Zeros(atom.clone()))
            }
        }
        // The normal coordinate vanishes on the wall only.
        Term::Comp(..) => {
            if cx.is_boundary_point(x) || natural {
                Kind::Smooth
            } else {
                Kind::Wall
            }
        }
        // An unknown function may be singular wherever its argument
        // reaches a special value: near every other interior point its
        // arguments name.
        Term::Fun(_, _, args) => match function_points(cx, x, args).into_iter().next() {
            Some(q) => Kind::Unknown(Singular::Point(q)),
            None => Kind::Smooth,
        },
        _ => Kind::Smooth,
    }
}

/// The other interior points the arguments of a function name, seen from
/// x (none from a point on the wall, where contact terms are not written).
fn function_points(cx: &Norm, x: &Point, args: &[Term]) -> BTreeSet<Point> {
    if cx.is_boundary_point(x) {
        return BTreeSet::new();
    }
    let mut others: Vec<Point> = Vec::new();
    for arg in args {
        points_in(arg, &mut others);
    }
    others
        .into_iter()
        .filter(|q| q.name != x.name && !q.par && !cx.is_boundary_point(q))
        .collect()
}

fn is_even(e: &BigRational) -> bool {
    e.is_integer() && (e.to_integer() % 2u32).is_zero()
}

/// An atom |a - b| (or a power of it) seen from x.
fn distance(cx: &Norm, x: &Point, a: &Point, b: &Point, polynomial: bool, atom: &Term) -> Kind {
    if polynomial {
        return Kind::Smooth;
    }
    let (mine, other) = if a.name == x.name { (a, b) } else { (b, a) };
    if other.is_origin() {
        // A length |x| to a non-even power: singular at the origin, which
        // is no declared point.
        return Kind::Unknown(Singular::Zeros(atom.clone()));
    }
    if other.name == x.name {
        // |x - x∥|: the height above the wall.
        return Kind::Wall;
    }
    let on_wall = |q: &Point| q.par || cx.is_boundary_point(q);
    if cx.is_boundary_point(x) {
        return if on_wall(other) {
            Kind::At(other.clone())
        } else {
            Kind::Smooth
        };
    }
    match (mine.par, on_wall(other)) {
        // |x - p| for an interior p.
        (false, false) => Kind::At(other.clone()),
        // |x - s| with s on the wall.
        (false, true) => Kind::Wall,
        // |x∥ - q|: at least the height of q when q is off the wall;
        // otherwise singular on the line above it.
        (true, false) => Kind::Smooth,
        (true, true) => Kind::Unknown(Singular::Zeros(atom.clone())),
    }
}

/// The points a term mentions (outside integrals that bind them).
fn points_in(t: &Term, out: &mut Vec<Point>) {
    match t {
        Term::Dist(a, b) | Term::DeltaFn(a, b) => {
            out.push(a.clone());
            out.push(b.clone());
        }
        Term::Comp(a, _) | Term::DeltaY(a) => out.push(a.clone()),
        Term::Pow(a, b) => {
            points_in(a, out);
            points_in(b, out);
        }
        Term::Mul(ts) | Term::Add(ts) => ts.iter().for_each(|t| points_in(t, out)),
        Term::Fun(_, _, args) => args.iter().for_each(|t| points_in(t, out)),
        Term::Der(_, p, body) => {
            out.push(p.clone());
            points_in(body, out);
        }
        Term::Corr(ops) => out.extend(ops.iter().map(|o| o.point.clone())),
        Term::Integral(i) => points_in(&i.body, out),
        _ => {}
    }
}

/// True if a scalar is positive wherever it is defined: a sum of products
/// with positive coefficients of positive atoms (distances, heights of
/// bulk points above the wall, declared positive parameters, the
/// dimension, S_d), at least one of them strictly so.
pub fn positive(cx: &Context, t: &Term) -> bool {
    let summands = match t {
        Term::Add(ts) => ts.clone(),
        t => vec![t.clone()],
    };
    let mut strict = false;
    for s in &summands {
        let factors = match s {
            Term::Mul(fs) => fs.clone(),
            f => vec![f.clone()],
        };
        let mut all_strict = true;
        for f in &factors {
            match atom_sign(cx, f) {
                Sign::Positive => {}
                Sign::NonNegative => all_strict = false,
                Sign::Unknown => return false,
            }
        }
        strict |= all_strict;
    }
    strict
}

/// True for an atom that is never negative where it is defined, so that
/// its powers compose: (a^m)^q = a^(m q).
pub(super) fn never_negative(cx: &Context, a: &Term) -> bool {
    matches!(atom_sign(cx, a), Sign::Positive | Sign::NonNegative)
}

enum Sign {
    Positive,
    NonNegative,
    Unknown,
}

fn atom_sign(cx: &Context, f: &Term) -> Sign {
    match f {
        Term::Num(c) if c.is_positive() => Sign::Positive,
        Term::Sym(s) if cx.is_positive_symbol(s) => Sign::Positive,
        // A distance between distinct points; zero where they meet.
        Term::Dist(..) => Sign::NonNegative,
        Term::Comp(p, Index::N) if !cx.is_boundary_point(p) => Sign::Positive,
        Term::Pow(base, e) => match (atom_sign(cx, base), &**e) {
            (Sign::Positive, _) => Sign::Positive,
            (Sign::NonNegative, _) => Sign::NonNegative,
            (Sign::Unknown, Term::Num(q)) if is_even(q) => Sign::NonNegative,
            _ => Sign::Unknown,
        },
        Term::Add(_) | Term::Mul(_) if positive(cx, f) => Sign::Positive,
        _ => Sign::Unknown,
    }
}
