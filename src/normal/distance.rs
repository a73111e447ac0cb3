//! Powers of one distance put over a common power, so that identities
//! between them cancel.
//!
//! In a sum, |p - q|^a and |p - q|^(a+2k) are written as |p - q|^a times
//! (|p - q|²)^k with |p - q|² = p·p - 2 p·q + q·q in coordinates. After
//! this every monomial carries the lowest power of each distance, and a sum
//! that vanishes by the algebra of distances collects to zero.

use std::collections::BTreeSet;

use num_rational::BigRational;
use num_traits::{ToPrimitive, Zero};

use super::Norm;
use super::{expand, Mono};
use crate::diagnostic::Result;
use crate::term::{Index, Point, Term};

/// Largest power of |p - q|² expanded into coordinates.
const MAX_EXPANDED: u32 = 6;

pub fn common_powers(ctx: &Norm, mut monos: Vec<Mono>) -> Result<Vec<Mono>> {
    if monos.len() < 2 {
        return Ok(monos);
    }
    let distances: BTreeSet<Term> = monos
        .iter()
        .flat_map(|m| m.atoms.keys())
        .filter(|a| matches!(a, Term::Dist(..)))
        .cloned()
        .collect();
    for (di, dist) in distances.into_iter().enumerate() {
        let Term::Dist(p, q) = &dist else { continue };
        let exponent = |m: &Mono| {
            m.atoms
                .get(&dist)
                .cloned()
                .unwrap_or_else(BigRational::zero)
        };
        let Some(lowest) = monos.iter().map(exponent).min() else {
            continue;
        };
        // Only shifts by even whole numbers can be expanded.
        let shift = |m: &Mono| -> Option<u32> {
            let d = exponent(m) - &lowest;
            let twice = (d / BigRational::from_integer(2.into())).to_integer();
            (BigRational::from_integer(twice.clone()) * BigRational::from_integer(2.into())
                == exponent(m) - &lowest)
                .then(|| twice.to_u32())
                .flatten()
                .filter(|k| *k <= MAX_EXPANDED)
        };
        if monos.iter().any(|m| shift(m).is_none()) || monos.iter().all(|m| exponent(m) == lowest) {
            continue;
        }
        // The j-th factor |p - q|² of a monomial sums over its own index;
        // the same names in every monomial let equal products merge.
        let mut squares: Vec<Vec<Mono>> = Vec::new();
        let mut next = Vec::with_capacity(monos.len());
        for m in monos {
            let k = shift(&m).unwrap_or(0);
            let mut base = m.clone();
            if lowest.is_zero() {
                base.atoms.remove(&dist);
            } else {
                base.atoms.insert(dist.clone(), lowest.clone());
            }
            let mut acc = vec![base];
            for j in 0..k as usize {
                while squares.len() <= j {
                    let name = Index::Named(format!("κd{di}_{}", squares.len()));
                    squares.push(expand(ctx, &squared(p, q, &name))?);
                }
                let terms = &squares[j];
                acc = acc
                    .iter()
                    .flat_map(|a| terms.iter().map(move |t| a.mul(t)))
                    .collect();
            }
            next.extend(acc);
        }
        monos = super::merge(next);
    }
    Ok(monos)
}

/// The other way round: p·p written as |p - q|² + 2 p·q - q·q in every
/// monomial, for one distance |p - q| of the sum (`eliminate` is p or q).
/// Normalisation keeps this form when it is shorter, so that
/// (p·p - 2 p·q + q·q)/|p - q|² reads 1.
pub fn dot_to_distance(
    ctx: &Norm,
    monos: &[Mono],
    dist: &Term,
    eliminate: &Point,
) -> Option<Vec<Mono>> {
    let Term::Dist(p, q) = dist else {
        return None;
    };
    let other = if p.name == eliminate.name && p.par == eliminate.par {
        q
    } else {
        p
    };
    // Only a contraction over every direction is a square of the distance:
    // over indices along the wall it misses the normal components.
    let is_square_of = |m: &Mono, k: &str| {
        if ctx.index_kind(k) != crate::context::IndexKind::Bulk {
            return false;
        }
        let mut count = 0;
        for f in &m.factors {
            match f {
                Term::Comp(x, Index::Named(i)) if i == k => {
                    if x.name != eliminate.name || x.par != eliminate.par {
                        return false;
                    }
                    count += 1;
                }
                f if mentions_index(f, k) => return false,
                _ => {}
            }
        }
        count == 2
    };
    let mut changed = false;
    let mut out = Vec::with_capacity(monos.len());
    for m in monos {
        let summed = m.factors.iter().find_map(|f| match f {
            Term::Comp(x, Index::Named(k))
                if x.name == eliminate.name && x.par == eliminate.par && is_square_of(m, k) =>
            {
                Some(k.clone())
            }
            _ => None,
        });
        let Some(k) = summed else {
            out.push(m.clone());
            continue;
        };
        changed = true;
        let rest: Vec<Term> = m
            .factors
            .iter()
            .filter(|f| !matches!(f, Term::Comp(_, Index::Named(i)) if *i == k))
            .cloned()
            .collect();
        let index = Index::Named(k.clone());
        let mut squared = Mono {
            coef: m.coef.clone(),
            atoms: m.atoms.clone(),
            factors: rest.clone(),
        };
        let slot = squared
            .atoms
            .entry(dist.clone())
            .or_insert_with(BigRational::zero);
        *slot += BigRational::from_integer(2.into());
        if slot.is_zero() {
            squared.atoms.remove(dist);
        }
        out.push(squared);
        let mut cross = rest.clone();
        cross.push(Term::Comp(eliminate.clone(), index.clone()));
        cross.push(Term::Comp(other.clone(), index.clone()));
        out.push(Mono {
            coef: &m.coef * BigRational::from_integer(2.into()),
            atoms: m.atoms.clone(),
            factors: cross,
        });
        let mut far = rest;
        far.push(Term::Comp(other.clone(), index.clone()));
        far.push(Term::Comp(other.clone(), index));
        out.push(Mono {
            coef: -m.coef.clone(),
            atoms: m.atoms.clone(),
            factors: far,
        });
    }
    changed.then_some(out)
}

fn mentions_index(t: &Term, k: &str) -> bool {
    let mut found = false;
    super::contract::visit_indices(t, &mut |i| found |= i.name() == Some(k));
    found
}

/// |p - q|² = p_k p_k - 2 p_k q_k + q_k q_k.
fn squared(p: &Point, q: &Point, k: &Index) -> Term {
    let dot = |a: &Point, b: &Point| {
        Term::Mul(vec![
            Term::Comp(a.clone(), k.clone()),
            Term::Comp(b.clone(), k.clone()),
        ])
    };
    Term::Add(vec![
        dot(p, p),
        Term::Mul(vec![Term::int(-2), dot(p, q)]),
        dot(q, q),
    ])
}
