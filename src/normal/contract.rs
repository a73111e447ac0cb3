//! Index algebra on one monomial: traces, contractions with δ and n, the
//! parallel/normal split, and canonical names for summed indices.
//!
//! The identities used (Euclidean, unit normal n into the bulk; common
//! practice):
//!   δ[i,i] = d, δ[a,a] = d - 1 for parallel a, δ[n,n] = n[n] = 1,
//!   n[a] = δ[a,n] = 0 for parallel a, δ[i,k] X[k] = X[i],
//!   n[k] X[k] = X[n], δ[m,a] X[a] = X[m] - n[m] X[n] for parallel a,
//!   ∂[n](s) = 0 at a boundary point s (boundary points move only along
//!   the boundary).

use std::collections::{BTreeMap, BTreeSet};

use num_rational::BigRational;
use num_traits::One;

use super::{derivative, expand, Mono};
use crate::context::{Context, IndexKind};
use crate::term::{Index, Op, Term};

/// Applies the index algebra until nothing changes.
pub fn contract(ctx: &Context, m: Mono) -> Vec<Mono> {
    let mut work = vec![m];
    let mut done = Vec::new();
    // Every step removes a factor or an index occurrence, so this ends; the
    // bound is a guard against a future step that does not.
    let mut budget = 10_000usize;
    while let Some(m) = work.pop() {
        budget = budget.saturating_sub(1);
        match step(ctx, &m) {
            Some(next) if budget > 0 => work.extend(next),
            _ => done.push(finish(m)),
        }
    }
    done
}

/// One rewriting step, or `None` if the monomial is fully contracted.
fn step(ctx: &Context, m: &Mono) -> Option<Vec<Mono>> {
    // Factor-local identities first.
    for (k, f) in m.factors.iter().enumerate() {
        match local(ctx, f) {
            Local::Keep => {}
            Local::Zero => return Some(vec![]),
            Local::Replace(g) => {
                let mut next = m.clone();
                next.factors[k] = g;
                return Some(vec![next]);
            }
            Local::Scalar(scalars) => {
                let mut rest = m.clone();
                rest.factors.remove(k);
                return Some(rest.times_all(&scalars));
            }
        }
    }
    let counts = occurrences(&m.factors);
    let is_dummy_elsewhere =
        |name: &str, inside: usize| counts.get(name).copied().unwrap_or(0) == 2 && inside == 1;
    for (k, f) in m.factors.iter().enumerate() {
        match f {
            Term::Kron(i, j) => {
                for (dummy, other) in [(i, j), (j, i)] {
                    let Index::Named(name) = dummy else { continue };
                    let inside = usize::from(i == dummy) + usize::from(j == dummy);
                    if !is_dummy_elsewhere(name, inside) {
                        continue;
                    }
                    let mut rest = m.clone();
                    rest.factors.remove(k);
                    let split = ctx.index_kind(name) == IndexKind::Parallel
                        && matches!(other, Index::Named(o) if ctx.index_kind(o) == IndexKind::Bulk);
                    let mut out = vec![rename(&rest, name, other)];
                    if split {
                        // δ[m,a] X[a] = X[m] - n[m] X[n].
                        let mut normal = rename(&rest, name, &Index::N);
                        normal.coef = -normal.coef;
                        normal.factors.push(Term::Normal(other.clone()));
                        out.push(normal);
                    }
                    return Some(out);
                }
            }
            Term::Normal(Index::Named(name)) if is_dummy_elsewhere(name, 1) => {
                let mut rest = m.clone();
                rest.factors.remove(k);
                return Some(vec![rename(&rest, name, &Index::N)]);
            }
            _ => {}
        }
    }
    None
}

enum Local {
    Keep,
    Zero,
    Replace(Term),
    Scalar(Vec<Mono>),
}

fn local(ctx: &Context, f: &Term) -> Local {
    let parallel = |i: &Index| ctx.is_parallel(i);
    match f {
        Term::Kron(Index::N, Index::N) => Local::Scalar(vec![Mono::scalar(BigRational::one())]),
        Term::Kron(Index::N, i) | Term::Kron(i, Index::N) => {
            if parallel(i) {
                Local::Zero
            } else {
                Local::Replace(Term::Normal(i.clone()))
            }
        }
        Term::Kron(Index::Named(a), Index::Named(b)) if a == b => {
            let trace = ctx.trace(ctx.index_kind(a));
            // The trace is d or d - 1: a scalar, expandable without error.
            Local::Scalar(expand(ctx, &trace).unwrap_or_default())
        }
        Term::Normal(Index::N) => Local::Scalar(vec![Mono::scalar(BigRational::one())]),
        Term::Normal(i) if parallel(i) => Local::Zero,
        Term::Der(..) if normal_derivative_at_boundary(ctx, f) => Local::Zero,
        _ => Local::Keep,
    }
}

/// True if a derivative chain contains ∂[n](s) at a boundary point s.
fn normal_derivative_at_boundary(ctx: &Context, f: &Term) -> bool {
    match f {
        Term::Der(i, p, body) => {
            (*i == Index::N && ctx.is_boundary_point(p)) || normal_derivative_at_boundary(ctx, body)
        }
        _ => false,
    }
}

/// How often each named index occurs in a list of factors.
fn occurrences(factors: &[Term]) -> BTreeMap<String, usize> {
    let mut counts = BTreeMap::new();
    for f in factors {
        visit_indices(f, &mut |i| {
            if let Index::Named(n) = i {
                *counts.entry(n.clone()).or_insert(0) += 1;
            }
        });
    }
    counts
}

/// Named indices in the order they appear.
fn visit_indices(f: &Term, visit: &mut impl FnMut(&Index)) {
    match f {
        Term::Kron(i, j) => {
            visit(i);
            visit(j);
        }
        Term::Normal(i) => visit(i),
        Term::Der(i, _, body) => {
            visit(i);
            visit_indices(body, visit);
        }
        Term::Corr(ops) => ops.iter().flat_map(|o| &o.indices).for_each(visit),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().for_each(|t| visit_indices(t, visit)),
        _ => {}
    }
}

fn rename(m: &Mono, from: &str, to: &Index) -> Mono {
    let map = BTreeMap::from([(from.to_string(), to.clone())]);
    Mono {
        coef: m.coef.clone(),
        atoms: m.atoms.clone(),
        factors: m.factors.iter().map(|f| rename_in(f, &map)).collect(),
    }
}

/// Renames indices simultaneously.
fn rename_in(f: &Term, map: &BTreeMap<String, Index>) -> Term {
    let r = |i: &Index| match i {
        Index::Named(n) => map.get(n).cloned().unwrap_or_else(|| i.clone()),
        Index::N => Index::N,
    };
    match f {
        Term::Kron(i, j) => Term::Kron(r(i), r(j)),
        Term::Normal(i) => Term::Normal(r(i)),
        Term::Der(i, p, body) => Term::Der(r(i), p.clone(), Box::new(rename_in(body, map))),
        Term::Corr(ops) => Term::Corr(
            ops.iter()
                .map(|o| Op {
                    point: o.point.clone(),
                    name: o.name.clone(),
                    indices: o.indices.iter().map(r).collect(),
                })
                .collect(),
        ),
        other => other.clone(),
    }
}

/// Puts each factor in canonical shape and sorts the factors.
fn finish(mut m: Mono) -> Mono {
    for f in &mut m.factors {
        *f = canonical_factor(std::mem::replace(f, Term::one()));
    }
    m.factors.sort();
    m
}

fn canonical_factor(f: Term) -> Term {
    match f {
        Term::Kron(i, j) if j < i => Term::Kron(j, i),
        Term::Corr(mut ops) => {
            ops.sort();
            Term::Corr(ops)
        }
        Term::Der(i, p, body) => derivative(&i, &p, canonical_factor(*body)),
        other => other,
    }
}

/// Renames summed indices to the first unused names of their kind from the
/// file's index pool, in order of appearance, so that monomials equal up to
/// the names of summed indices become identical.
pub fn canonical_dummies(ctx: &Context, mut m: Mono) -> Mono {
    for _ in 0..4 {
        let counts = occurrences(&m.factors);
        let free: BTreeSet<&String> = counts
            .iter()
            .filter(|(_, c)| **c == 1)
            .map(|(n, _)| n)
            .collect();
        let mut order: Vec<String> = Vec::new();
        for f in &m.factors {
            visit_indices(f, &mut |i| {
                if let Index::Named(n) = i {
                    if counts.get(n) == Some(&2) && !order.contains(n) {
                        order.push(n.clone());
                    }
                }
            });
        }
        if order.is_empty() {
            return m;
        }
        let mut used: BTreeMap<IndexKind, usize> = BTreeMap::new();
        let mut map = BTreeMap::new();
        for name in &order {
            let kind = ctx.index_kind(name);
            let pool: Vec<&String> = ctx
                .index_pool
                .get(&kind)
                .map(|s| s.iter().filter(|n| !free.contains(n)).collect())
                .unwrap_or_default();
            let k = used.entry(kind).or_insert(0);
            let target = pool.get(*k).map(|s| (*s).clone()).unwrap_or_else(|| {
                // The pool always holds the file's own names; this is a
                // fallback for terms built outside a file.
                format!("k{}", *k + 1)
            });
            *k += 1;
            map.insert(name.clone(), Index::Named(target));
        }
        let renamed = finish(Mono {
            coef: m.coef.clone(),
            atoms: m.atoms.clone(),
            factors: m.factors.iter().map(|f| rename_in(f, &map)).collect(),
        });
        if renamed == m {
            return m;
        }
        m = renamed;
    }
    m
}
