//! The normal form of the Gauss hypergeometric function: every ₂F₁ and
//! its z-derivatives written in F = ₂F₁(a, b; c; z) and F' = dF/dz of one
//! member of its family, with coefficients rational in z and the
//! parameters. A polynomial in such functions then has one form, so that
//! an identity between them comes out as a remainder of zero.
//!
//! The identities used (each checked numerically in tests/special.rs):
//!
//! - the differential equation z(1 - z) F'' + [c - (a + b + 1) z] F' - ab F = 0
//!   (DLMF 15.10.1), and its k-th derivative
//!   z(1 - z) F^(k+2) + [c + k - (a + b + 2k + 1) z] F^(k+1) - (a + k)(b + k) F^(k) = 0,
//!   which is the equation of F^(k) ∝ ₂F₁(a + k, b + k; c + k; z) (derived);
//!   it turns F^(k), k ≥ 2, into F and F';
//! - the derivative d/dz ₂F₁(a, b; c; z) = (ab/c) ₂F₁(a + 1, b + 1; c + 1; z)
//!   (DLMF 15.5.1), read both ways: a member shifted by one in a, b and c is
//!   a derivative of the one below, and the one below is
//!   ₂F₁(a, b; c; z) = [z(1 - z) G' + (c - (a + b + 1) z) G]/c with
//!   G = ₂F₁(a + 1, b + 1; c + 1; z) (the equation above with G' = (c/(ab)) F'', derived);
//! - ₂F₁(a, b; c; 0) = 1, and ₂F₁(0, b; c; z) = 1 (the series, DLMF 15.2.1).
//!
//! The member of a family (parameters a + n, b + n, c + n for whole n) all
//! are written in is the one whose a has its constant part in [0, 1):
//! ₂F₁(Δ/2 + 1, …) is written in ₂F₁(Δ/2, …). A shift that would divide by
//! a parameter that is exactly zero is not made. Division by a, b or c is
//! generic in the parameters, as (d - 2)/(d - 2) = 1 is (docs/conventions.md §10).

use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use super::{cancel, collect, expand, normalize_in, Mono, Norm};
use crate::diagnostic::Result;
use crate::term::Term;

/// Largest shift of the parameters made to reach the family's member.
const MAX_SHIFT: i64 = 8;

/// The monomials of ₂F₁^(k)(a, b; c; z), parameters already normalised.
pub(super) fn expand_hyp2f1(ctx: &Norm, args: &[Term], k: u32) -> Result<Vec<Mono>> {
    let [a, b, c, z] = args else {
        return Ok(vec![Mono::atom(
            Term::Fun(crate::term::HYP2F1.into(), vec![0, 0, 0, k], args.to_vec()),
            BigRational::one(),
        )]);
    };
    // ₂F₁(a, b; c; 0) = 1: the k-th derivative there is (a)_k (b)_k/(c)_k.
    if z.is_zero() {
        let mut factors = Vec::new();
        for j in 0..k {
            let j = Term::int(i64::from(j));
            factors.push(Term::Add(vec![a.clone(), j.clone()]));
            factors.push(Term::Add(vec![b.clone(), j.clone()]));
            factors.push(Term::Pow(
                Box::new(Term::Add(vec![c.clone(), j])),
                Box::new(Term::int(-1)),
            ));
        }
        return expand(ctx, &Term::Mul(factors));
    }
    // A polynomial of degree 0: ₂F₁(0, b; c; z) = 1, unless c is a
    // non-positive whole number (then the series has 0/0 terms).
    if (a.is_zero() || b.is_zero()) && !nonpositive_integer(c) {
        return Ok(if k == 0 {
            vec![Mono::scalar(BigRational::one())]
        } else {
            vec![]
        });
    }
    let n = shift(a);
    let step = |d: i64| -> Result<[Term; 3]> {
        Ok([
            normalize_in(ctx, &Term::Add(vec![a.clone(), Term::int(d)]))?,
            normalize_in(ctx, &Term::Add(vec![b.clone(), Term::int(d)]))?,
            normalize_in(ctx, &Term::Add(vec![c.clone(), Term::int(d)]))?,
        ])
    };
    if n > 0 {
        // F^(k)(a, b; c) = (c - 1)/((a - 1)(b - 1)) F^(k+1)(a - 1, b - 1; c - 1).
        let [a1, b1, c1] = step(-1)?;
        if !a1.is_zero() && !b1.is_zero() {
            let t = Term::Mul(vec![
                c1.clone(),
                Term::Pow(Box::new(a1.clone()), Box::new(Term::int(-1))),
                Term::Pow(Box::new(b1.clone()), Box::new(Term::int(-1))),
                Term::hyp2f1(k + 1, a1, b1, c1, z.clone()),
            ]);
            return expand(ctx, &t);
        }
    } else if n < 0 && !c.is_zero() {
        let [a1, b1, c1] = step(1)?;
        let up = |j: u32| Term::hyp2f1(j, a1.clone(), b1.clone(), c1.clone(), z.clone());
        let c_inverse = Term::Pow(Box::new(c.clone()), Box::new(Term::int(-1)));
        let t = if k == 0 {
            // F = [z(1 - z) G' + (c - (a + b + 1) z) G]/c.
            Term::Mul(vec![
                c_inverse,
                Term::Add(vec![
                    Term::Mul(vec![z.clone(), one_minus(z), up(1)]),
                    Term::Mul(vec![
                        Term::Add(vec![
                            c.clone(),
                            Term::Mul(vec![
                                Term::int(-1),
                                Term::Add(vec![a.clone(), b.clone(), Term::one()]),
                                z.clone(),
                            ]),
                        ]),
                        up(0),
                    ]),
                ]),
            ])
        } else {
            // F^(k) = (ab/c) G^(k-1).
            Term::Mul(vec![a.clone(), b.clone(), c_inverse, up(k - 1)])
        };
        return expand(ctx, &t);
    }
    reduce_order(ctx, [a, b, c, z], k)
}

/// F^(k) at the family's member, in F and F': the k-th derivative of the
/// differential equation, used from the top down as a recursion on the
/// coefficients of F and F'.
fn reduce_order(ctx: &Norm, [a, b, c, z]: [&Term; 4], k: u32) -> Result<Vec<Mono>> {
    let atom = |j: u32| {
        Mono::atom(
            Term::hyp2f1(j, a.clone(), b.clone(), c.clone(), z.clone()),
            BigRational::one(),
        )
    };
    if k < 2 {
        return Ok(vec![atom(k)]);
    }
    // F^(j) = α_j F + β_j F', as normal-form terms.
    let mut alpha = vec![Term::one(), Term::zero()];
    let mut beta = vec![Term::zero(), Term::one()];
    let inverse = Term::Pow(
        Box::new(Term::Mul(vec![z.clone(), one_minus(z)])),
        Box::new(Term::int(-1)),
    );
    for j in 2..=k {
        let m = Term::int(i64::from(j) - 2);
        // (a + m)(b + m) and c + m - (a + b + 2m + 1) z, with m = j - 2.
        let p = Term::Mul(vec![
            Term::Add(vec![a.clone(), m.clone()]),
            Term::Add(vec![b.clone(), m.clone()]),
        ]);
        let q = Term::Add(vec![
            c.clone(),
            m.clone(),
            Term::Mul(vec![
                Term::int(-1),
                Term::Add(vec![
                    a.clone(),
                    b.clone(),
                    Term::Mul(vec![Term::int(2), m]),
                    Term::one(),
                ]),
                z.clone(),
            ]),
        ]);
        let next = |v: &[Term]| -> Result<Term> {
            let t = Term::Mul(vec![
                inverse.clone(),
                Term::Add(vec![
                    Term::Mul(vec![p.clone(), v[v.len() - 2].clone()]),
                    Term::Mul(vec![Term::int(-1), q.clone(), v[v.len() - 1].clone()]),
                ]),
            ]);
            Ok(collect(expand(ctx, &t)?))
        };
        let a_next = next(&alpha)?;
        let b_next = next(&beta)?;
        alpha.push(a_next);
        beta.push(b_next);
    }
    let (Some(al), Some(be)) = (alpha.last(), beta.last()) else {
        return Ok(vec![]);
    };
    let mut out = Vec::new();
    for m in expand(ctx, al)? {
        out.push(m.mul(&atom(0)));
    }
    for m in expand(ctx, be)? {
        out.push(m.mul(&atom(1)));
    }
    Ok(out)
}

/// 1 - z.
fn one_minus(z: &Term) -> Term {
    Term::Add(vec![Term::one(), Term::Mul(vec![Term::int(-1), z.clone()])])
}

/// How far the family's member lies below `a`: the floor of a's constant
/// part, when a has a part that is not constant (a number alone is its
/// own member).
fn shift(a: &Term) -> i64 {
    let Some(poly) = cancel::scalar_poly(a) else {
        return 0;
    };
    if poly.keys().all(|atoms| atoms.is_empty()) {
        return 0;
    }
    let constant = poly
        .iter()
        .find(|(atoms, _)| atoms.is_empty())
        .map_or_else(BigRational::zero, |(_, c)| c.clone());
    constant
        .floor()
        .to_integer()
        .to_i64()
        .filter(|n| n.abs() <= MAX_SHIFT)
        .unwrap_or(0)
}

/// True for 0, -1, -2, …
pub(super) fn nonpositive_integer(t: &Term) -> bool {
    matches!(t, Term::Num(c) if c.is_integer() && !c.is_positive())
}

/// A remainder with ₂F₁ in it, taken apart for the verdict: the
/// coefficients of the distinct products F^i F'^j of its one family, or
/// why a remainder of this shape cannot refute a claim.
///
/// A nonzero remainder Σ c_ij F^i F'^j refutes the claim when some c_ij is
/// a nonzero function and F, F' are algebraically independent over the
/// rational functions — true when the parameters are generic: none of a,
/// b, c - a, c - b a whole number (otherwise the equation is reducible and
/// F may satisfy a first-order equation, as ₂F₁(1, 1; 2; z) = -ln(1 - z)/z
/// does) and not all three numbers (which may make F algebraic; Schwarz's
/// list). Everything else is undecided: two families (contiguous relations
/// and transformations of the argument relate them), ₂F₁ inside another
/// function or a power of a sum, a fractional power of it.
pub fn split(ctx: &crate::context::Context, t: &Term) -> std::result::Result<Vec<Term>, String> {
    let monos = super::monomials(ctx, t).map_err(|e| e.message)?;
    let mut base: Option<[Term; 4]> = None;
    let mut groups: std::collections::BTreeMap<Vec<(u32, BigRational)>, Vec<Mono>> =
        std::collections::BTreeMap::new();
    for m in monos {
        if m.factors.iter().any(contains_hyp2f1) {
            return Err("₂F₁ stands beside correlators, δ-functions or derivatives".into());
        }
        let mut key = Vec::new();
        let mut rest = m.clone();
        rest.atoms.clear();
        for (atom, e) in &m.atoms {
            let Some((args, k)) = atom.as_hyp2f1() else {
                if contains_hyp2f1(atom) {
                    return Err("₂F₁ is inside a power of a sum or inside another function".into());
                }
                rest.atoms.insert(atom.clone(), e.clone());
                continue;
            };
            if !(e.is_integer() && e.is_positive()) || k > 1 {
                return Err("₂F₁ is carried to a power that is not a positive whole number".into());
            }
            let args = args.map(Term::clone);
            match &base {
                None => base = Some(args),
                Some(b) if *b == args => {}
                Some(_) => {
                    return Err("₂F₁ of two families is left (different parameters or arguments), and relations between them — contiguous relations, transformations of the argument — are not decided".into())
                }
            }
            key.push((k, e.clone()));
        }
        groups.entry(key).or_default().push(rest);
    }
    let Some([a, b, c, _]) = &base else {
        return Ok(groups.into_values().map(collect).collect());
    };
    let numbers = [a, b, c].iter().all(|p| matches!(p, Term::Num(_)));
    if numbers {
        return Err(
            "the parameters of ₂F₁ are numbers, where it may be elementary or algebraic".into(),
        );
    }
    let difference = |x: &Term, y: &Term| {
        super::normalize(
            ctx,
            &Term::Add(vec![x.clone(), Term::Mul(vec![Term::int(-1), y.clone()])]),
        )
    };
    let whole = |t: &Term| matches!(t, Term::Num(q) if q.is_integer());
    for p in [
        Some((*a).clone()),
        Some((*b).clone()),
        difference(c, a).ok(),
        difference(c, b).ok(),
    ] {
        match p {
            Some(p) if !whole(&p) => {}
            _ => return Err("one of a, b, c - a, c - b of ₂F₁ is a whole number, where it may satisfy a first-order equation".into()),
        }
    }
    Ok(groups.into_values().map(collect).collect())
}

/// True if ₂F₁ occurs anywhere in `t`.
pub fn contains_hyp2f1(t: &Term) -> bool {
    match t {
        Term::Fun(name, _, args) => name == crate::term::HYP2F1 || args.iter().any(contains_hyp2f1),
        Term::Pow(a, b) => contains_hyp2f1(a) || contains_hyp2f1(b),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().any(contains_hyp2f1),
        Term::Der(_, _, body) => contains_hyp2f1(body),
        Term::Integral(i) => contains_hyp2f1(&i.body),
        _ => false,
    }
}
