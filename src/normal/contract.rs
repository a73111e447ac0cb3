//! Index algebra on one monomial: traces, contractions with δ and n, the
//! parallel/normal split, and canonical names for summed indices.
//!
//! The identities used (Euclidean, unit normal n into the bulk; common
//! practice):
//!   δ[i,i] = d, δ[a,a] = d - 1 for parallel a, δ[n,n] = n[n] = 1,
//!   n[a] = δ[a,n] = 0 for parallel a, δ[i,k] X[k] = X[i],
//!   n[k] X[k] = X[n], δ[m,a] X[a] = X[m] - n[m] X[n] for parallel a,
//!   p[a] q[a] = p[k] q[k] - p[n] q[n] for coordinates and parallel a,
//!   x[n]^k δ(y(x)) = 0 for k > 0,
//!   p[k] q[k] = (|p|² + |q|² - |p - q|²)/2 over all directions,
//!   ∂[n](s) = 0 at a boundary point s (boundary points move only along
//!   the boundary),
//!   Ŵ[…n…] = 0 for a boundary tensor Ŵ of spin ≥ 2 (its indices run
//!   along the wall), and an index summed over one of its slots is named
//!   as a parallel index.

use std::collections::{BTreeMap, BTreeSet};

use num_rational::BigRational;
use num_traits::{One, Signed};

use super::{derivative, expand, Mono};
use crate::context::{Context, IndexKind};
use crate::diagnostic::Result;
use crate::term::{Index, Op, Point, Term};

fn two() -> BigRational {
    BigRational::from_integer(2.into())
}

/// Applies the index algebra until nothing changes.
pub fn contract(ctx: &Context, m: Mono) -> Result<Vec<Mono>> {
    contract_within(ctx, m, CONTRACTION_STEPS)
}

/// Rewriting steps one call of [`contract`] may take. Every step removes a
/// factor or an index occurrence, so the loop ends; the bound guards against
/// a step that does not. Meeting it is an error (the claim is then unknown,
/// `Stop::ContractionLimit`), never a monomial left half contracted.
pub const CONTRACTION_STEPS: usize = 10_000;

/// [`contract`] with a given number of steps.
fn contract_within(ctx: &Context, m: Mono, steps: usize) -> Result<Vec<Mono>> {
    let mut work = vec![m];
    let mut done = Vec::new();
    let mut left = steps;
    while let Some(m) = work.pop() {
        match step(ctx, &m) {
            Some(_) if left == 0 => return Err(crate::budget::contraction_unfinished(steps)),
            Some(next) => {
                left -= 1;
                work.extend(next)
            }
            None => done.push(finish(ctx, m)),
        }
    }
    Ok(done)
}

/// One rewriting step, or `None` if the monomial is fully contracted.
fn step(ctx: &Context, m: &Mono) -> Option<Vec<Mono>> {
    // y^k δ(y) = 0 for k > 0: the height above the wall vanishes on it.
    for f in &m.factors {
        let Term::DeltaY(p) = f else { continue };
        let height = m.atoms.iter().any(|(a, e)| {
            e.is_positive()
                && match a {
                    Term::Comp(q, Index::N) => q.name == p.name && !q.par,
                    Term::Dist(a, b) => a.name == p.name && b.name == p.name && a.par != b.par,
                    _ => false,
                }
        });
        if height {
            return Some(vec![]);
        }
    }
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
    // x[a] y[a] over a parallel index, both coordinates: written over all
    // directions, x[k] y[k] - x[n] y[n], so that it meets |x - y|² and the
    // normal part is not lost.
    for (name, count) in &counts {
        if *count != 2 || ctx.index_kind(name) != IndexKind::Parallel {
            continue;
        }
        let coordinates = m
            .factors
            .iter()
            .filter(|f| matches!(f, Term::Comp(_, Index::Named(k)) if k == name))
            .count();
        if coordinates == 2 {
            let bulk = Index::Named(format!("·b{name}"));
            let mut normal = rename(m, name, &Index::N);
            normal.coef = -normal.coef;
            return Some(vec![rename(m, name, &bulk), normal]);
        }
    }
    // p[k] q[k] over all directions: lengths and distances,
    // p·q = (|p|² + |q|² - |p - q|²)/2 (common practice), so that identities
    // between distances need no expansion into coordinates.
    for (name, count) in &counts {
        if *count != 2 || ctx.index_kind(name) != IndexKind::Bulk {
            continue;
        }
        let at: Vec<(usize, &Point)> = m
            .factors
            .iter()
            .enumerate()
            .filter_map(|(k, f)| match f {
                Term::Comp(p, Index::Named(i)) if i == name && !p.is_origin() => Some((k, p)),
                _ => None,
            })
            .collect();
        let [(a, p), (b, q)] = at[..] else { continue };
        let mut rest = m.clone();
        rest.factors.remove(b);
        rest.factors.remove(a);
        let length = |x: &Point| Mono::atom(Term::Dist(x.clone(), Point::origin()), two());
        if p == q {
            return Some(vec![rest.mul(&length(p))]);
        }
        let (lo, hi) = if p < q { (p, q) } else { (q, p) };
        let mut across = Mono::atom(Term::Dist(lo.clone(), hi.clone()), two());
        across.coef = -BigRational::one();
        let half = BigRational::new(1.into(), 2.into());
        return Some(
            [length(p), length(q), across]
                .into_iter()
                .map(|mut t| {
                    t.coef *= &half;
                    rest.mul(&t)
                })
                .collect(),
        );
    }
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
                    // δ[m,c] Ŵ[…c…] with Ŵ a boundary tensor and m not
                    // parallel stays as it is: Ŵ[…m…] would not read back
                    // (its indices run along the wall), and the projector
                    // is what δ[m,c] over a parallel c means.
                    if !ctx.is_parallel(other)
                        && *other != Index::N
                        && on_boundary_tensor(ctx, &rest.factors, name)
                    {
                        continue;
                    }
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
            Local::Scalar(expand(&super::Norm::new(ctx), &trace).unwrap_or_default())
        }
        Term::Normal(Index::N) => Local::Scalar(vec![Mono::scalar(BigRational::one())]),
        Term::Normal(i) if parallel(i) => Local::Zero,
        // A coordinate or parameter component with only normal indices is a
        // scalar; with a normal index on a parallel parameter it vanishes.
        Term::Comp(..) | Term::Param(..) if has_normal(ctx, f) => {
            Local::Scalar(super::expand(&super::Norm::new(ctx), f).unwrap_or_default())
        }
        Term::Param(name, indices)
            if is_antisymmetric(ctx, name) && indices.len() == 2 && indices[0] == indices[1] =>
        {
            Local::Zero
        }
        Term::Der(..) if normal_derivative_at_boundary(ctx, f) => Local::Zero,
        Term::Der(..) | Term::Corr(_) if traced_traceless(ctx, f) => Local::Zero,
        Term::Der(..) | Term::Corr(_) if normal_on_boundary_tensor(ctx, f) => Local::Zero,
        _ => Local::Keep,
    }
}

/// True if a correlator (under derivatives) holds a declared symmetric
/// traceless tensor with a summed index pair: its trace vanishes as an
/// operator.
fn traced_traceless(ctx: &Context, f: &Term) -> bool {
    match f {
        Term::Der(_, _, body) => traced_traceless(ctx, body),
        Term::Corr(ops) => {
            ops.iter().any(|op| {
                ctx.is_traceless_op(&op.name)
                    && op.indices.iter().enumerate().any(|(k, i)| {
                        matches!(i, Index::Named(_)) && op.indices[k + 1..].contains(i)
                    })
            })
        }
        _ => false,
    }
}

/// True if a correlator (under derivatives) holds a boundary tensor
/// (spin ≥ 2) with the index n: its indices run along the wall, so that
/// component is zero (docs/conventions.md §13). A boundary vector keeps
/// its normal component (T_nn at the wall is D).
fn normal_on_boundary_tensor(ctx: &Context, f: &Term) -> bool {
    match f {
        Term::Der(_, _, body) => normal_on_boundary_tensor(ctx, body),
        Term::Corr(ops) => ops
            .iter()
            .any(|op| ctx.is_boundary_tensor(&op.name) && op.indices.contains(&Index::N)),
        _ => false,
    }
}

/// True if `name` is an index of a boundary tensor (spin ≥ 2) in one of
/// the factors: summed there, it runs along the wall.
fn on_boundary_tensor(ctx: &Context, factors: &[Term], name: &str) -> bool {
    fn corr(f: &Term) -> Option<&[Op]> {
        match f {
            Term::Der(_, _, body) => corr(body),
            Term::Corr(ops) => Some(ops),
            _ => None,
        }
    }
    factors.iter().filter_map(corr).any(|ops| {
        ops.iter().any(|op| {
            ctx.is_boundary_tensor(&op.name) && op.indices.iter().any(|i| i.name() == Some(name))
        })
    })
}

/// A coordinate's normal component, a parameter with only normal indices
/// (a scalar), or a parallel parameter with a normal index (zero). A
/// parameter such as ω[ρ, n] with a named index besides n stays a factor:
/// expanding it gives it back unchanged, and treating it as a scalar made
/// the contraction loop on it until its guard ran out, leaving the
/// monomial (and every later one) uncontracted.
fn has_normal(ctx: &Context, f: &Term) -> bool {
    match f {
        Term::Comp(_, i) => *i == Index::N,
        Term::Param(name, indices) => {
            indices.contains(&Index::N)
                && (indices.iter().all(|i| *i == Index::N)
                    || ctx.params.get(name).is_some_and(|d| d.parallel))
        }
        _ => false,
    }
}

fn is_antisymmetric(ctx: &Context, name: &str) -> bool {
    ctx.params.get(name).is_some_and(|p| p.antisymmetric)
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

/// Named indices in the order they appear, anywhere inside a factor.
pub(super) fn visit_indices(f: &Term, visit: &mut impl FnMut(&Index)) {
    match f {
        Term::Kron(i, j) => {
            visit(i);
            visit(j);
        }
        Term::Normal(i) | Term::OutNormal(i) | Term::Comp(_, i) => visit(i),
        Term::Param(_, indices) => indices.iter().for_each(visit),
        Term::Der(i, _, body) => {
            visit(i);
            visit_indices(body, visit);
        }
        Term::Corr(ops) => ops.iter().flat_map(|o| &o.indices).for_each(visit),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().for_each(|t| visit_indices(t, visit)),
        Term::Pow(a, b) => {
            visit_indices(a, visit);
            visit_indices(b, visit);
        }
        Term::Integral(i) => visit_indices(&i.body, visit),
        Term::Num(_)
        | Term::Sym(_)
        | Term::Dist(..)
        | Term::Fun(..)
        | Term::DeltaFn(..)
        | Term::DeltaY(_) => {}
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

/// Renames indices simultaneously, anywhere inside a factor.
fn rename_in(f: &Term, map: &BTreeMap<String, Index>) -> Term {
    let index = |i: &Index| match i {
        Index::Named(n) => map.get(n).cloned().unwrap_or_else(|| i.clone()),
        Index::N => Index::N,
    };
    f.map(&|p| p.clone(), &index, None)
}

/// Puts each factor in canonical shape (symmetric and antisymmetric index
/// pairs sorted, with the sign an antisymmetric swap brings) and sorts the
/// factors.
fn finish(ctx: &Context, mut m: Mono) -> Mono {
    let mut negate = false;
    for f in &mut m.factors {
        *f = canonical_factor(ctx, std::mem::replace(f, Term::one()), &mut negate);
    }
    if negate {
        m.coef = -m.coef;
    }
    m.factors.sort();
    m
}

fn canonical_factor(ctx: &Context, f: Term, negate: &mut bool) -> Term {
    match f {
        Term::Kron(i, j) if j < i => Term::Kron(j, i),
        Term::Param(name, mut indices)
            if is_antisymmetric(ctx, &name) && indices.len() == 2 && indices[1] < indices[0] =>
        {
            indices.swap(0, 1);
            *negate = !*negate;
            Term::Param(name, indices)
        }
        Term::Corr(mut ops) => {
            for op in &mut ops {
                if ctx.is_symmetric_op(&op.name) {
                    op.indices.sort();
                }
            }
            ops.sort();
            Term::Corr(ops)
        }
        Term::Der(i, p, body) => derivative(&i, &p, canonical_factor(ctx, *body, negate)),
        // An integral's body is one monomial: canonicalise its factors.
        Term::Integral(mut i) => {
            i.body = match i.body {
                Term::Mul(fs) => {
                    let mut fs: Vec<Term> = fs
                        .into_iter()
                        .map(|f| canonical_factor(ctx, f, negate))
                        .collect();
                    fs.sort();
                    Term::Mul(fs)
                }
                body => canonical_factor(ctx, body, negate),
            };
            Term::Integral(i)
        }
        other => other,
    }
}

/// Renames summed indices to the first unused names of their kind from the
/// file's index pool, in order of appearance, so that monomials equal up to
/// the names of summed indices become identical. A monomial that equals
/// minus itself when two summed indices swap (an antisymmetric tensor
/// contracted with a symmetric one) is zero.
/// [`canonical_dummies`] of a monomial with these factors, as far as it
/// depends on them alone: whether the coefficient changes sign, and the
/// renamed factors. `None` when a factor is antisymmetric (then the
/// coefficient and the atoms take part).
pub(super) fn dummies_renamed(ctx: &Context, factors: Vec<Term>) -> Option<(bool, Vec<Term>)> {
    let antisymmetric = factors
        .iter()
        .any(|f| matches!(f, Term::Param(name, _) if is_antisymmetric(ctx, name)));
    if antisymmetric {
        return None;
    }
    let m = rename_canonically(
        ctx,
        Mono {
            coef: BigRational::one(),
            atoms: Default::default(),
            factors,
        },
    );
    Some((m.coef.is_negative(), m.factors))
}

pub fn canonical_dummies(ctx: &Context, m: Mono) -> Mono {
    let m = rename_canonically(ctx, m);
    let antisymmetric = m
        .factors
        .iter()
        .any(|f| matches!(f, Term::Param(name, _) if is_antisymmetric(ctx, name)));
    if !antisymmetric {
        return m;
    }
    let counts = occurrences(&m.factors);
    let dummies: Vec<&String> = counts
        .iter()
        .filter(|(_, c)| **c == 2)
        .map(|(n, _)| n)
        .collect();
    for (k, a) in dummies.iter().enumerate() {
        for b in &dummies[k + 1..] {
            let map = BTreeMap::from([
                ((*a).clone(), Index::Named((*b).clone())),
                ((*b).clone(), Index::Named((*a).clone())),
            ]);
            let swapped = rename_canonically(
                ctx,
                finish(
                    ctx,
                    Mono {
                        coef: m.coef.clone(),
                        atoms: m.atoms.clone(),
                        factors: m.factors.iter().map(|f| rename_in(f, &map)).collect(),
                    },
                ),
            );
            if swapped.factors == m.factors
                && swapped.atoms == m.atoms
                && swapped.coef == -m.coef.clone()
            {
                return Mono::scalar(num_rational::BigRational::from_integer(0.into()));
            }
        }
    }
    m
}

/// True when every factor carrying the index `name` is a coordinate of a
/// boundary point.
fn on_wall_only(ctx: &Context, factors: &[Term], name: &str) -> bool {
    factors.iter().all(|f| {
        let mut mentions = false;
        visit_indices(f, &mut |i| mentions |= i.name() == Some(name));
        !mentions
            || matches!(f, Term::Comp(p, Index::Named(n)) if n == name && ctx.is_boundary_point(p))
    })
}

fn rename_canonically(ctx: &Context, mut m: Mono) -> Mono {
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
        // Order summed indices by where they occur, with every other summed
        // index anonymised, so that the order does not depend on names:
        // x[k] x[k] x[m] b[m] and x[k] x[m] x[m] b[k] agree. Ties keep the
        // order of first appearance.
        let dummies: BTreeSet<String> = order.iter().cloned().collect();
        let signatures: BTreeMap<String, Vec<Term>> = order
            .iter()
            .map(|d| (d.clone(), signature(&m.factors, d, &dummies)))
            .collect();
        order.sort_by(|a, b| signatures[a].cmp(&signatures[b]));
        // With no two signatures alike the order depends on structure
        // alone, and one renaming is final.
        let distinct = order
            .windows(2)
            .all(|w| signatures[&w[0]] != signatures[&w[1]]);
        let mut used: BTreeMap<IndexKind, usize> = BTreeMap::new();
        let mut map = BTreeMap::new();
        for name in &order {
            let kind = match ctx.index_kind(name) {
                // s1[a] s2[a] = s1[k] s2[k] for boundary points (their
                // normal coordinate is 0): one form, the bulk one, so that
                // it meets |s1 - s2|² expanded in coordinates.
                IndexKind::Parallel if on_wall_only(ctx, &m.factors, name) => IndexKind::Bulk,
                // Summed over a boundary tensor's slot, a bulk index runs
                // along the wall (the normal component is zero): named as
                // the language writes it, with a parallel name.
                IndexKind::Bulk if on_boundary_tensor(ctx, &m.factors, name) => IndexKind::Parallel,
                kind => kind,
            };
            let mut pool: Vec<String> = ctx
                .index_pool
                .get(&kind)
                .map(|s| s.iter().filter(|n| !free.contains(n)).cloned().collect())
                .unwrap_or_default();
            let k = used.entry(kind).or_insert(0);
            // Beyond the file's own names: k1, k2, … (bulk indices need no
            // declaration, so these read back).
            let mut extra = 1;
            while pool.len() <= *k {
                let candidate = format!("k{extra}");
                extra += 1;
                if !free.contains(&candidate) && !pool.contains(&candidate) {
                    pool.push(candidate);
                }
            }
            map.insert(name.clone(), Index::Named(pool[*k].clone()));
            *k += 1;
        }
        if map
            .iter()
            .all(|(from, to)| matches!(to, Index::Named(t) if t == from))
        {
            return m;
        }
        let renamed = finish(
            ctx,
            Mono {
                coef: m.coef.clone(),
                atoms: m.atoms.clone(),
                factors: m.factors.iter().map(|f| rename_in(f, &map)).collect(),
            },
        );
        if distinct || renamed == m {
            return renamed;
        }
        m = renamed;
    }
    m
}

/// Where a summed index occurs: each factor holding it, with the index
/// written `#` and every other summed index `_`, sorted.
fn signature(factors: &[Term], dummy: &str, dummies: &BTreeSet<String>) -> Vec<Term> {
    let map: BTreeMap<String, Index> = dummies
        .iter()
        .map(|d| {
            let mark = if d == dummy { "#" } else { "_" };
            (d.clone(), Index::Named(mark.to_string()))
        })
        .collect();
    let mut out: Vec<Term> = factors
        .iter()
        .filter(|f| {
            let mut found = false;
            visit_indices(f, &mut |i| {
                found |= matches!(i, Index::Named(n) if n == dummy)
            });
            found
        })
        .map(|f| rename_in(f, &map))
        .collect();
    out.sort();
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// δ[n,n] = 1 takes one rewriting step (common practice).
    fn delta_nn() -> Mono {
        Mono::factor(Term::Kron(Index::N, Index::N))
    }

    #[test]
    fn contraction_within_its_bound_finishes() {
        let ctx = Context::default();
        let done = contract_within(&ctx, delta_nn(), CONTRACTION_STEPS).unwrap();
        assert_eq!(done, vec![Mono::scalar(BigRational::one())]);
    }

    /// A contraction that meets its bound is an error naming it, which the
    /// engine turns into UNKNOWN; never the monomial half contracted.
    #[test]
    fn contraction_meeting_its_bound_is_an_error_not_a_remainder() {
        let ctx = Context::default();
        let e = contract_within(&ctx, delta_nn(), 0).unwrap_err();
        assert!(crate::budget::is_contraction_unfinished(&e), "{e:?}");
        assert!(!crate::budget::is_too_many_terms(&e));
    }
}
