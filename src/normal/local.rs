//! Expansions of explicit functions near a point, and averages over the
//! unit sphere around it.
//!
//! Near a point p write x = p + ε u, with u a unit vector. A monomial
//! |x - p|^E R(x) whose other factors R are smooth at p expands as
//! ε^E Σ_k ε^k (u·∂)^k R(p) / k! (Taylor; common practice). Collected by
//! the power of ε, such expansions tell the local degree of a sum of
//! monomials at p, and its flux through a small sphere around p:
//! ∮_{|x - p| = ε} N_i G_i dS = ε^(D-1) ∫ dΩ u_i G_i(p + ε u), D the
//! dimension of the space x moves in. The exponents reported here include
//! that surface factor ε^(D-1).
//!
//! Averages over the unit sphere S^(d-1) (common practice):
//! ∫ dΩ u_i1 … u_i2k = S_d Σ_pairings Π δ / (d (d+2) … (d+2k-2)), and an
//! odd number of u's integrates to zero.

use std::collections::BTreeMap;

use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use super::{calculus, collect, expand, integrate, normalize_in, Mono, Norm};
use crate::context::{DIMENSION, SPHERE_AREA};
use crate::diagnostic::Result;
use crate::term::{Index, Point, Term};

/// The name of the unit vector u of an expansion. No term that leaves
/// normalisation carries it: every expansion is averaged over the sphere or
/// checked to vanish before its result is used.
const UNIT: &str = "·u";

/// Most orders of a Taylor expansion taken (the order needed is the gap
/// between the local degree and the surface degree, small in practice).
const MAX_ORDER: u32 = 6;

/// A small sphere around a point: in the bulk, S^(d-1); in the wall, the
/// sphere S^(d-2) of the directions along it.
pub(super) struct Sphere {
    /// The unit vector u (a projection when it runs along the wall, so that
    /// u_n = 0).
    unit: Point,
    /// The dimension D of the space the sphere's centre moves in.
    dim: Term,
    /// Its area; in the wall a name of this module's own, never printed:
    /// wall fluxes are only tested for zero.
    area: Term,
    wall: bool,
}

impl Sphere {
    pub(super) fn bulk(cx: &Norm) -> Sphere {
        Sphere {
            unit: Point {
                rank: u32::MAX,
                par: false,
                name: UNIT.into(),
            },
            dim: cx.dim(),
            area: Term::Sym(SPHERE_AREA.into()),
            wall: false,
        }
    }

    pub(super) fn wall(cx: &Norm) -> Sphere {
        Sphere {
            unit: Point {
                rank: u32::MAX,
                par: true,
                name: UNIT.into(),
            },
            dim: Term::Add(vec![cx.dim(), Term::int(-1)]),
            area: Term::Sym("·S_wall".into()),
            wall: true,
        }
    }

    /// D - 1: the power of ε in the area element of the sphere.
    pub(super) fn surface(&self) -> Term {
        Term::Add(vec![self.dim.clone(), Term::int(-1)])
    }

    /// The component u_i of the unit vector, as monomials (u_n is a scalar
    /// atom, a named component a factor).
    pub(super) fn component(&self, cx: &Norm, i: &Index) -> Result<Vec<Mono>> {
        expand(cx, &Term::Comp(self.unit.clone(), i.clone()))
    }
}

/// What expanding a sum of monomials at a point found.
pub(super) enum Local {
    /// The terms of the expansion by exact power of ε (surface factor
    /// included), up to the highest power asked for.
    Orders(BTreeMap<BigRational, Vec<Mono>>),
    /// The powers of ε cannot be ordered (a symbolic exponent), or the
    /// expansion would need too many orders.
    Undecided,
}

/// The local exponent of a monomial at p: the power of |x - p| it carries
/// (rational, or symbolic through `(|x - p|^R)^c` atoms), and the
/// monomial without it.
pub(super) fn split_singular(m: &Mono, x: &Point, p: &Point) -> (Term, Mono) {
    let mut exponent = vec![Term::zero()];
    let mut rest = m.clone();
    for (atom, e) in &m.atoms {
        let inner = match atom {
            Term::Pow(base, r) if matches!(**base, Term::Dist(..)) => Some((&**base, Some(&**r))),
            Term::Dist(..) => Some((atom, None)),
            _ => None,
        };
        let Some((Term::Dist(a, b), symbolic)) = inner else {
            continue;
        };
        if !joins(a, b, x, p) {
            continue;
        }
        rest.atoms.remove(atom);
        exponent.push(match symbolic {
            Some(r) => Term::Mul(vec![Term::Num(e.clone()), r.clone()]),
            None => Term::Num(e.clone()),
        });
    }
    (Term::Add(exponent), rest)
}

/// True if |a - b| is |x - p| (in either order, whole points).
pub(super) fn joins(a: &Point, b: &Point, x: &Point, p: &Point) -> bool {
    let same = |u: &Point, v: &Point| u.name == v.name && u.par == v.par;
    (same(a, x) && same(b, p)) || (same(a, p) && same(b, x))
}

/// `t = a + b d` with rational a, b (the dimension symbol d, or nothing
/// when the dimension is a number); `None` when `t` has other symbols.
pub(super) fn affine_in_d(t: &Term) -> Option<(BigRational, BigRational)> {
    let mut a = BigRational::zero();
    let mut b = BigRational::zero();
    let summands = match t {
        Term::Add(ts) => ts.clone(),
        t => vec![t.clone()],
    };
    for s in summands {
        match s {
            Term::Num(c) => a += c,
            Term::Sym(name) if name == DIMENSION => b += BigRational::one(),
            Term::Mul(fs) => match fs.as_slice() {
                [Term::Num(c), Term::Sym(name)] if name == DIMENSION => b += c,
                _ => return None,
            },
            _ => return None,
        }
    }
    Some((a, b))
}

/// Expands the monomials at x = p + ε u, to ε^`upto` inclusive, with the
/// surface factor ε^(D-1) included (`surface` is D - 1, a term in d).
pub(super) fn expand_at(
    cx: &Norm,
    sphere: &Sphere,
    monos: &[Mono],
    x: &Point,
    p: &Point,
    upto: &BigRational,
) -> Result<Local> {
    let surface = &sphere.surface();
    let mut orders: BTreeMap<BigRational, Vec<Mono>> = BTreeMap::new();
    for m in monos {
        let (exponent, rest) = split_singular(m, x, p);
        let lowest = normalize_in(cx, &Term::Add(vec![exponent, surface.clone()]))?;
        let Some((a, b)) = affine_in_d(&lowest) else {
            return Ok(Local::Undecided);
        };
        if !b.is_zero() {
            // Above the window for every d ≥ 2, or undecided.
            let at_two = &a + &b * BigRational::from_integer(2.into());
            if b.is_positive() && &at_two > upto {
                continue;
            }
            return Ok(Local::Undecided);
        }
        if &a > upto {
            continue;
        }
        let Some(top) = (upto - &a).floor().to_integer().to_u32() else {
            return Ok(Local::Undecided);
        };
        if top > MAX_ORDER {
            return Ok(Local::Undecided);
        }
        for (k, term) in taylor(cx, sphere, &rest, x, p, top)?
            .into_iter()
            .enumerate()
        {
            let power = &a + BigRational::from_integer(k.into());
            orders.entry(power).or_default().extend(term);
        }
    }
    Ok(Local::Orders(orders))
}

/// The Taylor terms (u·∂)^k R(p) / k! for k = 0..=top.
fn taylor(
    cx: &Norm,
    sphere: &Sphere,
    r: &Mono,
    x: &Point,
    p: &Point,
    top: u32,
) -> Result<Vec<Vec<Mono>>> {
    let mut out = Vec::new();
    let mut current = vec![r.clone()];
    for k in 0..=top {
        let at_p = integrate::substitute(cx, &collect(current.clone()), x, p);
        out.push(expand(cx, &at_p)?);
        if k == top {
            break;
        }
        // (u·∂) R_k / (k + 1), summed over a fresh index.
        let index = Index::Named(format!("·t{k}"));
        let along = sphere.component(cx, &index)?;
        let scale = BigRational::new(1.into(), (k + 1).into());
        let mut next = Vec::new();
        for m in current {
            for dm in calculus::differentiate(cx, &index, x, m)? {
                for u in &along {
                    let mut t = dm.mul(u);
                    t.coef *= &scale;
                    next.push(t);
                }
            }
        }
        current = next;
    }
    Ok(out)
}

/// True if a sum of expansion terms vanishes as a function of u, using
/// u·u = 1.
pub(super) fn vanishes(cx: &Norm, terms: &[Mono]) -> Result<bool> {
    let reduced: Vec<Mono> = terms.iter().map(unit_square).collect();
    let t = normalize_in(cx, &collect(reduced))?;
    Ok(t.is_zero())
}

/// Removes pairs u_k u_k (u·u = 1).
fn unit_square(m: &Mono) -> Mono {
    let mut m = m.clone();
    loop {
        let mut found = None;
        'outer: for (a, f) in m.factors.iter().enumerate() {
            let Term::Comp(q, Index::Named(k)) = f else {
                continue;
            };
            if &*q.name != UNIT {
                continue;
            }
            for (b, g) in m.factors.iter().enumerate().skip(a + 1) {
                if matches!(g, Term::Comp(q2, Index::Named(k2)) if &*q2.name == UNIT && k2 == k) {
                    found = Some((a, b));
                    break 'outer;
                }
            }
        }
        let Some((a, b)) = found else {
            return m;
        };
        m.factors.remove(b);
        m.factors.remove(a);
    }
}

/// ∫ dΩ over the unit sphere S^(d-1) of a sum of expansion terms: every
/// product of u components replaced by its average times S_d.
pub(super) fn sphere_integral(cx: &Norm, sphere: &Sphere, terms: &[Mono]) -> Result<Vec<Mono>> {
    let mut out = Vec::new();
    let mut fresh = 0usize;
    for m in terms {
        let mut rest = m.clone();
        let mut indices: Vec<Index> = Vec::new();
        rest.factors.retain(|f| match f {
            Term::Comp(q, i) if &*q.name == UNIT => {
                indices.push(i.clone());
                false
            }
            _ => true,
        });
        // u_n^k: k factors n_j u_j.
        let normal = Term::Comp(sphere.unit.clone(), Index::N);
        if let Some(e) = rest.atoms.remove(&normal) {
            let Some(k) = e.to_integer().to_usize().filter(|_| e.is_integer()) else {
                // A fractional power of u_n: not a polynomial on the sphere.
                return Err(crate::diagnostic::Error::new(
                    crate::diagnostic::ErrorKind::Unsupported,
                    "a fractional power of a normal component appeared in a sphere average",
                ));
            };
            for _ in 0..k {
                let j = Index::Named(format!("·s{fresh}"));
                fresh += 1;
                rest.factors.push(Term::Normal(j.clone()));
                indices.push(j);
            }
        }
        if indices.len() % 2 == 1 {
            continue;
        }
        let half = indices.len() / 2;
        // S / (D (D + 2) … (D + 2k - 2)).
        let mut weight = vec![sphere.area.clone()];
        for l in 0..half {
            weight.push(Term::Pow(
                Box::new(Term::Add(vec![sphere.dim.clone(), Term::int(2 * l as i64)])),
                Box::new(Term::int(-1)),
            ));
        }
        let weight = expand(cx, &Term::Mul(weight))?;
        for pairing in pairings(&indices) {
            // δ_ij, or along the wall the projector δ_ij - n_i n_j.
            let factors: Vec<Term> = pairing
                .into_iter()
                .map(|(i, j)| {
                    let kron = Term::Kron(i.clone(), j.clone());
                    if sphere.wall {
                        Term::Add(vec![
                            kron,
                            Term::Mul(vec![Term::int(-1), Term::Normal(i), Term::Normal(j)]),
                        ])
                    } else {
                        kron
                    }
                })
                .collect();
            for t in expand(cx, &Term::Mul(factors))? {
                let t = rest.mul(&t);
                for w in &weight {
                    out.push(t.mul(w));
                }
            }
        }
    }
    Ok(out)
}

/// Every way to split a list of even length into pairs.
fn pairings(items: &[Index]) -> Vec<Vec<(Index, Index)>> {
    let Some((first, rest)) = items.split_first() else {
        return vec![vec![]];
    };
    let mut out = Vec::new();
    for k in 0..rest.len() {
        let mut others = rest.to_vec();
        let partner = others.remove(k);
        for mut tail in pairings(&others) {
            tail.push((first.clone(), partner.clone()));
            out.push(tail);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pairings_count_double_factorials() {
        let idx: Vec<Index> = (0..6).map(|k| Index::Named(format!("i{k}"))).collect();
        assert_eq!(pairings(&idx[..2]).len(), 1);
        assert_eq!(pairings(&idx[..4]).len(), 3);
        assert_eq!(pairings(&idx).len(), 15);
        assert!(BigRational::one().is_positive());
    }
}
