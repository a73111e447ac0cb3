//! Normalisation: any term to its contact-term normal form.
//!
//! The normal form is a sum of monomials, each an exact polynomial
//! coefficient times a sorted list of factors (δ-functions, normals,
//! Kronecker deltas, derivative chains on correlators). Normalisation
//! expands products over sums, moves derivatives through sums and
//! constants (Leibniz rule for products), orders commuting derivatives,
//! contracts indices (see [`contract`]), renames summed indices canonically
//! and collects like terms. Explicit functions (distances, coordinates,
//! unknown functions) are differentiated symbolically ([`calculus`]),
//! integrals sift their δ-functions ([`integrate`]), and powers of a
//! distance that differ by even integers are put over a common power
//! ([`distance`]) so that identities between them cancel. It is a
//! terminating, syntax-directed pass; it applies no Ward identity.

mod calculus;
mod cancel;
mod contract;
pub use contract::CONTRACTION_STEPS;
mod distribution;
mod flux;
pub mod hypergeometric;
mod integrate;
mod local;
mod monomial;

use std::collections::BTreeMap;

use rustc_hash::FxHashMap;

use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use crate::context::Context;
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::term::{Index, Point, Term};
pub use distribution::{positive, Caveats, Coincidence, Singular};
pub use monomial::{Atoms, Mono};

/// Puts `t` in contact-term normal form.
pub fn normalize(ctx: &Context, t: &Term) -> Result<Term> {
    Ok(normal_form(ctx, t)?.term)
}

/// The monomials of a term's normal form, each with its exact
/// coefficient, atoms and factors (for callers that split a sum by kind).
pub fn monomials(ctx: &Context, t: &Term) -> Result<Vec<Mono>> {
    let _work = crate::budget::Work::enter();
    let cx = Norm::new(ctx);
    Ok(merge(canonical(&cx, expand(&cx, t)?)?))
}

/// True if a normal form is zero as a function although its monomials did
/// not cancel: for each product of factors, the coefficient over the
/// common denominator of the sums it divides by has a zero numerator
/// ([`cancel`]'s `vanishes`). `false` proves nothing.
pub fn vanishes_identically(ctx: &Context, t: &Term) -> bool {
    let Ok(monos) = monomials(ctx, t) else {
        return false;
    };
    let mut groups: BTreeMap<Vec<Term>, cancel::Poly> = BTreeMap::new();
    for m in monos {
        let poly = groups.entry(m.factors).or_default();
        *poly.entry(m.atoms).or_insert_with(BigRational::zero) += m.coef;
    }
    groups.into_values().all(|mut poly| {
        poly.retain(|_, c| !c.is_zero());
        cancel::vanishes(&poly)
    })
}

/// A normal form and where it is established only away from coincident
/// points.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Normal {
    pub term: Term,
    pub caveats: Caveats,
}

/// Puts `t` in contact-term normal form and says where derivatives of
/// explicit functions were taken only away from coincident points.
pub fn normal_form(ctx: &Context, t: &Term) -> Result<Normal> {
    normal_form_with(ctx, t, None)
}

/// The same, remembering integrals in `memo` (an engine keeps one per
/// file, so that a flux worked out once is not worked out again).
pub fn normal_form_with(ctx: &Context, t: &Term, memo: Option<&Memo>) -> Result<Normal> {
    let cx = Norm {
        memo,
        ..Norm::new(ctx)
    };
    let term = normalize_in(&cx, t)?;
    Ok(Normal {
        term,
        caveats: cx.caveats.into_inner(),
    })
}

/// Integrals already expanded, with the caveats their expansion recorded.
#[derive(Default)]
pub struct Memo {
    integrals: std::sync::Mutex<FxHashMap<Term, (Vec<Mono>, Caveats)>>,
}

impl Memo {
    fn get(&self, t: &Term) -> Option<(Vec<Mono>, Caveats)> {
        self.integrals.lock().ok()?.get(t).cloned()
    }

    fn put(&self, t: Term, value: (Vec<Mono>, Caveats)) {
        if let Ok(mut map) = self.integrals.lock() {
            // A bound on memory: the memo is a cache, not a record.
            if map.len() > 4096 {
                map.clear();
            }
            map.insert(t, value);
        }
    }
}

/// Puts `t` in normal form as a function at distinct points: derivatives
/// of explicit functions are taken pointwise, with no contact terms. This
/// is what a value at a configuration of separated points needs (the
/// numeric layer and its models); an identity between distributions is
/// never decided this way.
pub fn normalize_pointwise(ctx: &Context, t: &Term) -> Result<Term> {
    let cx = Norm {
        pointwise: true,
        ..Norm::new(ctx)
    };
    normalize_in(&cx, t)
}

/// The normal form of a sum of products, `Σ_k Π_j products[k][j]`, as a
/// function at distinct points: the same term as [`normalize_pointwise`]
/// of the sum written out, computed with less repeated work (a Wick
/// expansion is such a sum, its factors the propagators). Each distinct
/// factor is expanded once; the monomials of a product are multiplied
/// group by group (monomials with the same non-scalar factors together),
/// with like monomials merged after every factor; like monomials of all
/// products are merged before the index algebra, which then runs once per
/// distinct list of factors. This is the same result because the index
/// algebra and the canonical renaming act on the non-scalar factors and
/// only multiply the coefficient (they are linear in it): merging before
/// them or after them gives the same sums.
pub fn normalize_products_pointwise(ctx: &Context, products: &[Vec<Term>]) -> Result<Term> {
    let _work = crate::budget::Work::enter();
    let cx = Norm {
        pointwise: true,
        ..Norm::new(ctx)
    };
    // A polynomial in the scalar atoms, with exact coefficients.
    type Poly = FxHashMap<Atoms, BigRational>;
    // The monomials of each distinct factor, grouped by their non-scalar
    // factors.
    let mut expanded: FxHashMap<&Term, Vec<(Vec<Term>, Poly)>> = FxHashMap::default();
    // Every product's monomials, merged: factors → polynomial.
    let mut pending: FxHashMap<Vec<Term>, Poly> = FxHashMap::default();
    for product in products {
        let mut acc: Vec<(Vec<Term>, Poly)> = vec![(
            Vec::new(),
            Poly::from_iter([(Atoms::new(), BigRational::one())]),
        )];
        for t in product {
            if !expanded.contains_key(t) {
                let mut groups: Vec<(Vec<Term>, Poly)> = Vec::new();
                for m in expand(&cx, t)? {
                    let slot = match groups.iter().position(|(f, _)| *f == m.factors) {
                        Some(k) => k,
                        None => {
                            groups.push((m.factors, Poly::default()));
                            groups.len() - 1
                        }
                    };
                    *groups[slot]
                        .1
                        .entry(m.atoms)
                        .or_insert_with(BigRational::zero) += m.coef;
                }
                for (_, poly) in &mut groups {
                    poly.retain(|_, c| !c.is_zero());
                }
                groups.retain(|(_, poly)| !poly.is_empty());
                expanded.insert(t, groups);
            }
            let groups = &expanded[t];
            let mut next: Vec<(Vec<Term>, Poly)> = Vec::new();
            let mut count = 0usize;
            for (fa, pa) in &acc {
                for (fb, pb) in groups {
                    let mut factors = fa.clone();
                    factors.extend(fb.iter().cloned());
                    let slot = match next.iter().position(|(f, _)| *f == factors) {
                        Some(k) => k,
                        None => {
                            next.push((factors, Poly::default()));
                            next.len() - 1
                        }
                    };
                    let poly = &mut next[slot].1;
                    count = count.saturating_add(pa.len().saturating_mul(pb.len()));
                    for (aa, ca) in pa {
                        for (ab, cb) in pb {
                            let atoms = aa.times(ab);
                            *poly.entry(atoms).or_insert_with(BigRational::zero) += ca * cb;
                        }
                    }
                }
            }
            crate::budget::spend(count)?;
            for (_, poly) in &mut next {
                poly.retain(|_, c| !c.is_zero());
                if poly
                    .values()
                    .any(|c| crate::budget::bits(c) > crate::budget::MAX_BITS)
                {
                    let monos: Vec<Mono> = poly
                        .iter()
                        .map(|(a, c)| Mono {
                            coef: c.clone(),
                            atoms: a.clone(),
                            factors: Vec::new(),
                        })
                        .collect();
                    crate::budget::coefficients(&monos)?;
                }
            }
            next.retain(|(_, poly)| !poly.is_empty());
            acc = next;
            if acc.is_empty() {
                break;
            }
        }
        for (factors, poly) in acc {
            let slot = pending.entry(factors).or_default();
            for (atoms, c) in poly {
                *slot.entry(atoms).or_insert_with(BigRational::zero) += c;
            }
        }
    }
    // The index algebra once per list of factors ([`contracted`] without
    // its memo), the canonical names once per contracted list; then each
    // coefficient and atoms as [`canonical`] treats them, summed by their
    // factors (`collect` sums like monomials itself, so this is `merge`
    // done a list of factors at a time).
    let mut sums: FxHashMap<Vec<Term>, Poly> = FxHashMap::default();
    let add_to = |sums: &mut FxHashMap<Vec<Term>, Poly>, m: Mono| {
        *sums
            .entry(m.factors)
            .or_default()
            .entry(m.atoms)
            .or_insert_with(BigRational::zero) += m.coef;
    };
    for (factors, poly) in pending {
        let poly = poly.into_iter().filter(|(_, c)| !c.is_zero());
        if factors.is_empty() || factors.iter().any(|f| matches!(f, Term::DeltaY(_))) {
            let monos = poly
                .map(|(atoms, coef)| Mono {
                    coef,
                    atoms,
                    factors: factors.clone(),
                })
                .collect();
            for m in canonical(&cx, monos)? {
                add_to(&mut sums, m);
            }
            continue;
        }
        let done = contract::contract(
            &cx,
            Mono {
                coef: BigRational::one(),
                atoms: Atoms::new(),
                factors,
            },
        )?;
        // Each contracted monomial with its renaming (sign, factors).
        type Renamed = Option<(bool, Vec<Term>)>;
        let done: Vec<(Mono, Renamed)> = done
            .into_iter()
            .map(|s| {
                let renamed = contract::dummies_renamed(&cx, s.factors.clone());
                (s, renamed)
            })
            .collect();
        let poly: Vec<(Atoms, BigRational)> = poly.collect();
        for (s, renamed) in &done {
            let Some((negate, factors)) = renamed else {
                for (atoms, coef) in &poly {
                    let rest = Mono {
                        coef: coef.clone(),
                        atoms: atoms.clone(),
                        factors: Vec::new(),
                    };
                    let m = rest.mul(s);
                    let m = match combine_powers(&cx, m.clone()) {
                        Ok(combined) => combined,
                        Err(_) => m,
                    };
                    add_to(&mut sums, contract::canonical_dummies(&cx, m));
                }
                continue;
            };
            let scalar = Mono {
                coef: if *negate {
                    -s.coef.clone()
                } else {
                    s.coef.clone()
                },
                atoms: s.atoms.clone(),
                factors: Vec::new(),
            };
            let slot = sums.entry(factors.clone()).or_default();
            for (atoms, coef) in &poly {
                let rest = Mono {
                    coef: coef.clone(),
                    atoms: atoms.clone(),
                    factors: Vec::new(),
                };
                let m = rest.mul(&scalar);
                let m = match combine_powers(&cx, m.clone()) {
                    Ok(combined) => combined,
                    Err(_) => m,
                };
                *slot.entry(m.atoms).or_insert_with(BigRational::zero) += m.coef;
            }
        }
    }
    let mut out = Vec::new();
    for (factors, poly) in sums {
        for (atoms, coef) in poly {
            if !coef.is_zero() {
                out.push(Mono {
                    coef,
                    atoms,
                    factors: factors.clone(),
                });
            }
        }
    }
    Ok(collect(out))
}

/// Derivatives of explicit functions already expanded, by term, shared by
/// pointwise normalisations in one file's context
/// ([`normalize_pointwise_with`]): the derivatives of one propagator taken
/// in many orders and combinations share their inner derivatives.
#[derive(Debug, Default)]
pub struct Derivatives {
    expanded: std::sync::Mutex<FxHashMap<Term, Vec<Mono>>>,
}

impl Derivatives {
    fn get(&self, t: &Term) -> Option<Vec<Mono>> {
        self.expanded.lock().ok()?.get(t).cloned()
    }

    fn put(&self, t: &Term, monos: &[Mono]) {
        if let Ok(mut map) = self.expanded.lock() {
            // A bound on memory: the memo is a cache, not a record.
            if map.len() > 4096 {
                map.clear();
            }
            map.insert(t.clone(), monos.to_vec());
        }
    }
}

/// [`normalize_pointwise`], with the derivatives expanded on the way
/// remembered in `derivatives` (which must only ever serve `ctx`'s file).
pub fn normalize_pointwise_with(
    ctx: &Context,
    t: &Term,
    derivatives: &Derivatives,
) -> Result<Term> {
    let cx = Norm {
        pointwise: true,
        derivatives: Some(derivatives),
        ..Norm::new(ctx)
    };
    normalize_in(&cx, t)
}

/// A canonical renaming of summed indices: `None` when the monomial is
/// zero, else whether it negates and the renamed factors.
type Renaming = Option<(bool, Vec<Term>)>;

/// The declarations of a file while one term is normalised, and what the
/// derivatives of explicit functions found on the way.
pub struct Norm<'c> {
    ctx: &'c Context,
    memo: Option<&'c Memo>,
    caveats: std::cell::RefCell<Caveats>,
    /// Derivatives are pointwise: values at separated points only.
    pointwise: bool,
    /// Symbolic powers of one base already combined: the atoms → their
    /// product in canonical form.
    powers: std::cell::RefCell<FxHashMap<Vec<(Term, BigRational)>, Mono>>,
    /// The index algebra already applied, by the factors of a monomial
    /// (see [`contracted`]).
    contracted: std::cell::RefCell<FxHashMap<Vec<Term>, Vec<Mono>>>,
    /// The canonical renaming of summed indices already found, by the
    /// factors of a monomial: whether it negates and the renamed factors,
    /// or `None` when the monomial is zero (see [`renamed`]).
    renamed: std::cell::RefCell<FxHashMap<Vec<Term>, Renaming>>,
    /// Derivatives expanded in earlier pointwise normalisations.
    derivatives: Option<&'c Derivatives>,
    /// Powers already expanded in this normalisation, by term (pointwise
    /// only, where expanding records no caveats; see [`expand`]).
    expanded_powers: std::cell::RefCell<FxHashMap<Term, Vec<Mono>>>,
}

impl<'c> Norm<'c> {
    pub fn new(ctx: &'c Context) -> Norm<'c> {
        Norm {
            ctx,
            memo: None,
            caveats: Default::default(),
            pointwise: false,
            powers: Default::default(),
            contracted: Default::default(),
            renamed: Default::default(),
            expanded_powers: Default::default(),
            derivatives: None,
        }
    }

    /// Records that a result holds only away from a coincidence.
    pub(crate) fn caveat(&self, c: Coincidence) {
        self.caveats.borrow_mut().insert(c);
    }
}

impl std::ops::Deref for Norm<'_> {
    type Target = Context;
    fn deref(&self) -> &Context {
        self.ctx
    }
}

/// Normalisation inside the pipeline, sharing the caveats of `cx`.
pub(crate) fn normalize_in(ctx: &Norm, t: &Term) -> Result<Term> {
    let _work = crate::budget::Work::enter();
    Ok(collect(merge(canonical(ctx, expand(ctx, t)?)?)))
}

/// Contracts indices and renames summed indices canonically.
fn canonical(ctx: &Norm, monos: Vec<Mono>) -> Result<Vec<Mono>> {
    let mut out = Vec::new();
    for m in monos {
        for m in contracted(ctx, m)? {
            // A failure leaves the powers as they were: still exact.
            let m = match combine_powers(ctx, m.clone()) {
                Ok(combined) => combined,
                Err(_) => m,
            };
            out.push(renamed(ctx, m));
        }
    }
    Ok(out)
}

/// [`contract::canonical_dummies`] through a memo on the factors: the
/// renaming rewrites the factors and at most flips the sign of the
/// coefficient, and with an antisymmetric parameter it may find the
/// monomial equal to its negative, whatever the (nonzero) coefficient and
/// the atoms (which it never reads), so it is worked out once per list of
/// factors on the coefficient 1: `None` for zero, else whether it negates
/// and the renamed factors.
fn renamed(ctx: &Norm, mut m: Mono) -> Mono {
    if m.factors.is_empty() || m.coef.is_zero() {
        return contract::canonical_dummies(ctx, m);
    }
    let known = ctx.renamed.borrow().get(&m.factors).cloned();
    let found = match known {
        Some(found) => found,
        None => {
            let unit = contract::canonical_dummies(
                ctx,
                Mono {
                    coef: BigRational::one(),
                    atoms: Atoms::new(),
                    factors: m.factors.clone(),
                },
            );
            let found = (!unit.coef.is_zero()).then(|| (unit.coef.is_negative(), unit.factors));
            let mut memo = ctx.renamed.borrow_mut();
            if memo.len() >= MAX_CONTRACTED {
                memo.clear();
            }
            memo.insert(m.factors.clone(), found.clone());
            found
        }
    };
    match found {
        None => Mono::scalar(BigRational::zero()),
        Some((negate, factors)) => {
            if negate {
                m.coef = -m.coef;
            }
            m.factors = factors;
            m
        }
    }
}

/// Most factor lists [`contracted`] remembers in one normalisation (a
/// bound on memory; the memo is a cache).
const MAX_CONTRACTED: usize = 1 << 15;

/// [`contract::contract`] through a memo on the factors: the index algebra
/// rewrites the factors and multiplies in scalars, while the coefficient
/// and the atoms only ride along (except next to δ(y), where the atoms say
/// whether the height vanishes), so a monomial is its coefficient and atoms
/// times the contraction of its factors alone. In a Wick expansion the
/// same index structure recurs with many different atoms.
fn contracted(ctx: &Norm, m: Mono) -> Result<Vec<Mono>> {
    if m.factors.is_empty() || m.factors.iter().any(|f| matches!(f, Term::DeltaY(_))) {
        return contract::contract(ctx, m);
    }
    let Mono {
        coef,
        atoms,
        factors,
    } = m;
    let rest = Mono {
        coef,
        atoms,
        factors: Vec::new(),
    };
    if let Some(done) = ctx.contracted.borrow().get(&factors) {
        return Ok(done.iter().map(|s| rest.mul(s)).collect());
    }
    let done = contract::contract(
        ctx,
        Mono {
            coef: BigRational::one(),
            atoms: Atoms::new(),
            factors: factors.clone(),
        },
    )?;
    let out = done.iter().map(|s| rest.mul(s)).collect();
    let mut memo = ctx.contracted.borrow_mut();
    if memo.len() >= MAX_CONTRACTED {
        memo.clear();
    }
    memo.insert(factors, done);
    Ok(out)
}

/// One symbolic power per base: |p - q|^(-d) |p - q|^(d - 2 Δ) is
/// |p - q|^(-2 Δ), kept as the rational part times (|p - q|^R)^c with R
/// primitive, as [`symbolic_power`] writes every power.
fn combine_powers(ctx: &Norm, mut m: Mono) -> Result<Mono> {
    let symbolic = |a: &Term| matches!(a, Term::Pow(_, r) if !matches!(**r, Term::Num(_)));
    if m.atoms.keys().filter(|a| symbolic(a)).count() < 2 {
        return Ok(m);
    }
    // base → exponent, as a polynomial in the parameters.
    let mut by_base: BTreeMap<Term, (Vec<Term>, cancel::Poly)> = BTreeMap::new();
    for (a, e) in &m.atoms {
        let (base, part) = match a {
            Term::Pow(b, r) if symbolic(a) => {
                let Some(r) = cancel::scalar_poly(r) else {
                    return Ok(m);
                };
                (
                    (**b).clone(),
                    r.into_iter().map(|(k, c)| (k, c * e)).collect(),
                )
            }
            other => (
                other.clone(),
                cancel::Poly::from([(Atoms::new(), e.clone())]),
            ),
        };
        let slot = by_base.entry(base).or_default();
        slot.0.push(a.clone());
        for (k, c) in part {
            *slot.1.entry(k).or_insert_with(BigRational::zero) += c;
        }
    }
    for (base, (atoms, exponent)) in by_base {
        if atoms.iter().filter(|a| symbolic(a)).count() < 2 {
            continue;
        }
        let key: Vec<(Term, BigRational)> = atoms
            .iter()
            .map(|a| (a.clone(), m.atoms[a].clone()))
            .collect();
        for a in &atoms {
            m.atoms.remove(a);
        }
        if let Some(done) = ctx.powers.borrow().get(&key) {
            m = m.mul(done);
            continue;
        }
        let before = m.clone();
        m = Mono::scalar(BigRational::one());
        let mut constant = BigRational::zero();
        let mut rest = Vec::new();
        for (k, c) in exponent {
            if c.is_zero() {
                continue;
            }
            if k.is_empty() {
                constant += c;
            } else {
                rest.push(Mono {
                    coef: c,
                    atoms: k,
                    factors: Vec::new(),
                });
            }
        }
        if !constant.is_zero() {
            m = m.mul(&Mono::atom(base.clone(), constant));
        }
        if let Some((c, primitive)) = primitive_monos(&rest) {
            m = m.mul(&Mono::atom(
                Term::Pow(Box::new(base), Box::new(primitive)),
                c,
            ));
        }
        ctx.powers.borrow_mut().insert(key, m.clone());
        m = before.mul(&m);
    }
    Ok(m)
}

/// Adds up monomials that differ only in their coefficient.
/// The order of the result is unspecified; `collect` sorts.
pub(super) fn merge(monos: Vec<Mono>) -> Vec<Mono> {
    let mut sums: FxHashMap<(Atoms, Vec<Term>), BigRational> =
        FxHashMap::with_capacity_and_hasher(monos.len(), Default::default());
    for m in monos {
        *sums
            .entry((m.atoms, m.factors))
            .or_insert_with(BigRational::zero) += m.coef;
    }
    sums.into_iter()
        .filter(|(_, c)| !c.is_zero())
        .map(|((atoms, factors), coef)| Mono {
            coef,
            atoms,
            factors,
        })
        .collect()
}

/// Expands a term into a list of monomials (not yet collected).
fn expand(ctx: &Norm, t: &Term) -> Result<Vec<Mono>> {
    crate::budget::spend(1)?;
    Ok(match t {
        Term::Num(c) => {
            if c.is_zero() {
                vec![]
            } else {
                vec![Mono::scalar(c.clone())]
            }
        }
        Term::Sym(s) => vec![Mono::atom(Term::Sym(s.clone()), BigRational::one())],
        Term::Add(ts) => {
            let mut out = Vec::new();
            for t in ts {
                out.extend(expand(ctx, t)?);
            }
            out
        }
        Term::Mul(ts) => {
            let mut acc = vec![Mono::scalar(BigRational::one())];
            for t in ts {
                let factor = expand(ctx, t)?;
                crate::budget::spend(acc.len().saturating_mul(factor.len()))?;
                let mut next = Vec::with_capacity(acc.len() * factor.len());
                for a in &acc {
                    for b in &factor {
                        next.push(a.mul(b));
                    }
                }
                crate::budget::coefficients(&next)?;
                acc = next;
                if acc.is_empty() {
                    break;
                }
            }
            acc
        }
        Term::Pow(b, e) if ctx.pointwise => {
            // A propagator's power recurs in every term of a correlator's
            // divergence: expanded once (a pure function of the term here).
            if let Some(known) = ctx.expanded_powers.borrow().get(t) {
                return Ok(known.clone());
            }
            let out = power(ctx, b, e)?;
            let mut memo = ctx.expanded_powers.borrow_mut();
            if memo.len() >= MAX_CONTRACTED {
                memo.clear();
            }
            memo.insert(t.clone(), out.clone());
            out
        }
        Term::Pow(b, e) => power(ctx, b, e)?,
        Term::DeltaFn(p, q) => {
            let (p, q) = if q < p { (q, p) } else { (p, q) };
            vec![Mono::factor(Term::DeltaFn(p.clone(), q.clone()))]
        }
        Term::DeltaY(p) => vec![Mono::factor(Term::DeltaY(p.clone()))],
        Term::Normal(Index::N) => vec![Mono::scalar(BigRational::one())],
        Term::Normal(i) => vec![Mono::factor(Term::Normal(i.clone()))],
        Term::Kron(i, j) => {
            let (i, j) = if j < i { (j, i) } else { (i, j) };
            vec![Mono::factor(Term::Kron(i.clone(), j.clone()))]
        }
        Term::Corr(ops) if ops.is_empty() => vec![Mono::scalar(BigRational::one())],
        Term::Corr(ops) => {
            let mut ops = ops.clone();
            ops.sort();
            vec![Mono::factor(Term::Corr(ops))]
        }
        Term::Der(i, p, body) => {
            // Only pointwise: elsewhere a derivative records caveats.
            let memo = ctx.derivatives.filter(|_| ctx.pointwise);
            if let Some(known) = memo.and_then(|m| m.get(t)) {
                return Ok(known);
            }
            let d = distribution::differentiate(ctx, i, p, expand(ctx, body)?)?;
            crate::budget::spend(d.len())?;
            if let Some(m) = memo {
                m.put(t, &d);
            }
            d
        }
        Term::Dist(p, q) => {
            if p.name == q.name && p.par == q.par {
                vec![]
            } else {
                let (p, q) = if q < p { (q, p) } else { (p, q) };
                vec![Mono::atom(
                    Term::Dist(p.clone(), q.clone()),
                    BigRational::one(),
                )]
            }
        }
        Term::Fun(name, orders, args) => {
            let args = args
                .iter()
                .map(|a| normalize_in(ctx, a))
                .collect::<Result<Vec<_>>>()?;
            if let Some((_, k)) = t.as_hyp2f1() {
                return hypergeometric::expand_hyp2f1(ctx, &args, k);
            }
            vec![Mono::atom(
                Term::Fun(name.clone(), orders.clone(), args),
                BigRational::one(),
            )]
        }
        Term::Comp(p, i) => coordinate(ctx, p, i)?,
        Term::Param(name, indices) => {
            let decl = ctx.params.get(name);
            let parallel = decl.is_some_and(|d| d.parallel);
            if parallel && indices.contains(&Index::N) {
                vec![]
            } else if indices.iter().all(|i| *i == Index::N) {
                if decl.is_some_and(|d| d.antisymmetric) {
                    vec![]
                } else {
                    vec![Mono::atom(t.clone(), BigRational::one())]
                }
            } else {
                vec![Mono::factor(t.clone())]
            }
        }
        Term::OutNormal(_) => vec![Mono::factor(t.clone())],
        Term::Integral(integral) => match ctx.memo {
            Some(memo) if !ctx.pointwise => {
                if let Some((monos, caveats)) = memo.get(t) {
                    ctx.caveats.borrow_mut().extend(caveats);
                    monos
                } else {
                    let before = ctx.caveats.borrow().clone();
                    let monos = integrate::integral(ctx, integral)?;
                    let added: Caveats =
                        ctx.caveats.borrow().difference(&before).cloned().collect();
                    memo.put(t.clone(), (monos.clone(), added));
                    monos
                }
            }
            _ => integrate::integral(ctx, integral)?,
        },
    })
}

/// The coordinate p[i]: a scalar atom for the normal coordinate, zero for
/// the normal coordinate of a point on the boundary (a boundary point or a
/// projection x∥), a factor otherwise.
fn coordinate(ctx: &Norm, p: &Point, i: &Index) -> Result<Vec<Mono>> {
    if p.is_origin() {
        return Ok(vec![]);
    }
    Ok(match i {
        Index::N if ctx.is_boundary_point(p) => vec![],
        Index::N => vec![Mono::atom(
            Term::Comp(p.clone(), Index::N),
            BigRational::one(),
        )],
        Index::Named(_) => vec![Mono::factor(Term::Comp(p.clone(), i.clone()))],
    })
}

/// Wraps a factor in a derivative, keeping chains of commuting derivatives
/// ordered by (point, index) so that equal chains compare equal.
pub(crate) fn derivative(i: &Index, p: &Point, f: Term) -> Term {
    match f {
        Term::Der(j, q, g) if (&q, &j) < (p, i) => Term::Der(j, q, Box::new(derivative(i, p, *g))),
        f => Term::Der(i.clone(), p.clone(), Box::new(f)),
    }
}

/// Largest integer power expanded by repeated multiplication.
const MAX_EXPANDED_POWER: u32 = 16;

fn power(ctx: &Norm, b: &Term, e: &Term) -> Result<Vec<Mono>> {
    let e = normalize_in(ctx, e)?;
    let base = expand(ctx, b)?;
    let Term::Num(q) = &e else {
        // A symbolic exponent: a monomial's atoms each get their own power;
        // anything else stays whole, as a scalar atom.
        if base.iter().any(|m| !m.factors.is_empty()) {
            return Err(unsupported_power());
        }
        if let [single] = &base[..] {
            let (free, kept) = sign_split(ctx, single);
            let mut out = symbolic_power(ctx, &free, &e)?;
            if let Some(kept) = kept {
                let (c, primitive) = primitive_part(ctx, &e)?;
                out = out.mul(&Mono::atom(
                    Term::Pow(Box::new(kept), Box::new(primitive)),
                    c,
                ));
            }
            return Ok(vec![out]);
        }
        return Ok(vec![Mono::atom(
            Term::Pow(Box::new(collect(base)), Box::new(e)),
            BigRational::one(),
        )]);
    };
    if q.is_zero() {
        return Ok(vec![Mono::scalar(BigRational::one())]);
    }
    if base.is_empty() {
        return if q.is_positive() {
            Ok(vec![])
        } else {
            Err(Error::new(
                ErrorKind::Arithmetic,
                "division by zero: zero raised to a negative power",
            ))
        };
    }
    if base.iter().any(|m| !m.factors.is_empty()) {
        // Powers of correlators and δ-functions are not distributions.
        if q.is_integer() && q.is_positive() {
            if let Some(n) = q.to_u32().filter(|n| *n <= MAX_EXPANDED_POWER) {
                return repeat_product(&base, n);
            }
        }
        return Err(unsupported_power());
    }
    if base.len() == 1 {
        if q.is_integer() {
            return base[0].scalar_power(q).map(|m| vec![m]);
        }
        // (a^m)^q = a^(m q) only for a ≥ 0: the rest keeps its power whole,
        // so that (g^2)^(1/2) is not g for a g of unknown sign.
        let (free, kept) = sign_split(ctx, &base[0]);
        let mut out = free.scalar_power(q)?;
        if let Some(kept) = kept {
            out = out.mul(&Mono::atom(kept, q.clone()));
        }
        return Ok(vec![out]);
    }
    if q.is_integer() && q.is_positive() {
        if let Some(n) = q.to_u32().filter(|n| *n <= MAX_EXPANDED_POWER) {
            return repeat_product(&base, n);
        }
    }
    // The monomial every term shares comes out first, with negative powers
    // as their lowest: (S_d λ/d - S_d λ)^(-1) = d/(S_d λ (1 - d)).
    if let Some((shared, rest)) = shared_monomial(&base) {
        let outer = power(ctx, &collect(vec![shared]), &Term::Num(q.clone()))?;
        let inner = power(ctx, &collect(rest), &Term::Num(q.clone()))?;
        let mut out = Vec::new();
        for a in &outer {
            for b in &inner {
                out.push(a.mul(b));
            }
        }
        return Ok(out);
    }
    // A negative whole power of a polynomial in one symbol with rational
    // roots is the product of its linear factors' powers, so that one
    // rational function has one normal form: (g^2 + 2 g + 1)^(-1) and
    // (g + 1)^(-2) are the same atom, and the division of `cancel` sees the
    // factors. Exact for whole powers only ((a b)^q = a^q b^q needs a, b ≥ 0
    // otherwise).
    if q.is_integer() && q.is_negative() {
        // The collected sum may carry its sign outside: -(d^2 - 2 d + 1).
        let (sign, sum) = match collect(base.clone()) {
            Term::Mul(fs) if fs.len() == 2 && matches!(fs[1], Term::Add(_)) => match &fs[..] {
                [Term::Num(c), sum] => (c.clone(), sum.clone()),
                _ => (BigRational::one(), Term::Mul(fs)),
            },
            other => (BigRational::one(), other),
        };
        if let Some((content, linear)) = crate::term::factor::factor_sum(&sum) {
            let mut out = vec![Mono::scalar(content * sign).scalar_power(q)?];
            for (factor, m) in linear {
                let e = q * BigRational::from_integer(m.into());
                let part = power(ctx, &factor, &Term::Num(e))?;
                out = out
                    .iter()
                    .flat_map(|a| part.iter().map(|b| a.mul(b)))
                    .collect();
            }
            return Ok(out);
        }
    }
    // A non-integer or negative power of a sum: the sum, in normal form, is
    // a scalar atom carrying the exponent, so (A)^(3/2) (A)^(-1) = (A)^(1/2).
    // Its content comes out first, (4 d - 4)^(-1) = (d - 1)^(-1)/4, so that
    // multiples of one sum are one atom (kept whole when a negative content
    // would need a fractional power).
    if let Some((c, primitive)) = primitive_monos(&base) {
        if q.is_integer() || c.is_positive() {
            let content = Mono::scalar(c).scalar_power(q)?;
            return Ok(vec![Mono::atom(primitive, q.clone()).mul(&content)]);
        }
    }
    Ok(vec![Mono::atom(collect(base), q.clone())])
}

/// The atoms every monomial of a sum carries, to their lowest power (a
/// missing atom counts as power zero, so negative powers come out too),
/// and the sum divided by them; `None` when nothing is shared.
fn shared_monomial(monos: &[Mono]) -> Option<(Mono, Vec<Mono>)> {
    let keys: std::collections::BTreeSet<&Term> =
        monos.iter().flat_map(|m| m.atoms.keys()).collect();
    let mut shared = Atoms::new();
    for a in keys {
        let lowest = monos
            .iter()
            .map(|m| m.atoms.get(a).cloned().unwrap_or_else(BigRational::zero))
            .min()
            .unwrap_or_else(BigRational::zero);
        if !lowest.is_zero() {
            shared.insert(a.clone(), lowest);
        }
    }
    if shared.is_empty() {
        return None;
    }
    let rest = monos
        .iter()
        .map(|m| {
            let mut r = m.clone();
            for (a, low) in &shared {
                let e = r.atoms.get(a).cloned().unwrap_or_else(BigRational::zero) - low;
                if e.is_zero() {
                    r.atoms.remove(a);
                } else {
                    r.atoms.insert(a.clone(), e);
                }
            }
            r
        })
        .collect();
    Some((
        Mono {
            coef: BigRational::one(),
            atoms: shared,
            factors: Vec::new(),
        },
        rest,
    ))
}

/// Splits a scalar monomial into the part whose powers may be taken factor
/// by factor (a positive coefficient, atoms never negative: distances,
/// heights above the wall, positive symbols) and the rest, as one term
/// (`None` when nothing is left).
fn sign_split(ctx: &Norm, m: &Mono) -> (Mono, Option<Term>) {
    let mut free = Mono::scalar(BigRational::one());
    let mut kept = Mono::scalar(BigRational::one());
    for (a, e) in &m.atoms {
        let target = if distribution::never_negative(ctx, a) {
            &mut free
        } else {
            &mut kept
        };
        target.atoms.insert(a.clone(), e.clone());
    }
    if m.coef.is_positive() {
        free.coef = m.coef.clone();
    } else {
        kept.coef = m.coef.clone();
    }
    if kept.atoms.is_empty() && kept.coef.is_one() {
        return (free, None);
    }
    let term = monomial::scalar_term(&kept.coef, &kept.atoms);
    (free, Some(term))
}

/// True for the summation-index names normalisation generates (`k1`, …).
pub fn is_generated_index(name: &str) -> bool {
    name.strip_prefix('k')
        .is_some_and(|digits| !digits.is_empty() && digits.chars().all(|c| c.is_ascii_digit()))
}

/// `m^E` for a scalar monomial and a symbolic exponent E: each atom a^r
/// becomes a^k · (a^(rE - k)) with k the rational part of rE, so that
/// powers differing by a number share one symbolic atom.
fn symbolic_power(ctx: &Norm, m: &Mono, e: &Term) -> Result<Mono> {
    let mut out = Mono::scalar(BigRational::one());
    let mut factors: Vec<(Term, BigRational)> = m
        .atoms
        .iter()
        .map(|(a, r)| (a.clone(), r.clone()))
        .collect();
    if !m.coef.is_one() {
        factors.push((Term::Num(m.coef.clone()), BigRational::one()));
    }
    for (a, r) in factors {
        let (k, rest) = split_constant(expand(ctx, &Term::Mul(vec![Term::Num(r), e.clone()]))?);
        if !k.is_zero() {
            out = match &a {
                // A number to a whole power folds into the coefficient.
                Term::Num(c) if k.is_integer() => {
                    out.mul(&Mono::scalar(c.clone()).scalar_power(&k)?)
                }
                _ => out.mul(&Mono::atom(a.clone(), k)),
            };
        }
        if !rest.is_zero() {
            // a^(c R) is kept as (a^R)^c with R primitive (whole
            // coefficients without a common factor, leading one positive),
            // so that (a^(-d))^2 and a^(-2 d) are one atom to one power.
            let (c, primitive) = primitive_part(ctx, &rest)?;
            out = out.mul(&Mono::atom(Term::Pow(Box::new(a), Box::new(primitive)), c));
        }
    }
    Ok(out)
}

/// `t = c · R` with R primitive: whole coefficients whose greatest common
/// divisor is 1, the first of them (in normal-form order) positive.
fn primitive_part(ctx: &Norm, t: &Term) -> Result<(BigRational, Term)> {
    let monos = expand(ctx, t)?;
    Ok(primitive_monos(&monos).unwrap_or_else(|| (BigRational::one(), t.clone())))
}

/// The same for a sum given as monomials; `None` for zero.
fn primitive_monos(monos: &[Mono]) -> Option<(BigRational, Term)> {
    use num_integer::Integer;
    let mut numerators = num_bigint::BigInt::zero();
    let mut denominators = num_bigint::BigInt::one();
    for m in monos {
        numerators = numerators.gcd(m.coef.numer());
        denominators = denominators.lcm(m.coef.denom());
    }
    if numerators.is_zero() {
        return None;
    }
    let mut c = BigRational::new(numerators, denominators);
    let scale = |c: &BigRational| {
        collect(
            monos
                .iter()
                .map(|m| Mono {
                    coef: &m.coef / c,
                    ..m.clone()
                })
                .collect(),
        )
    };
    let mut primitive = scale(&c);
    if let Term::Mul(fs) = &primitive {
        if matches!(fs.first(), Some(Term::Num(k)) if k.is_negative()) {
            c = -c;
            primitive = scale(&c);
        }
    }
    Some((c, primitive))
}

/// Splits the constant part off a scalar: `Delta + 2` → (2, Delta), the
/// rest in normal form.
fn split_constant(monos: Vec<Mono>) -> (BigRational, Term) {
    let mut constant = BigRational::zero();
    let mut rest = Vec::new();
    for m in monos {
        if m.atoms.is_empty() && m.factors.is_empty() {
            constant += m.coef;
        } else {
            rest.push(m);
        }
    }
    (constant, collect(rest))
}

fn unsupported_power() -> Error {
    Error::new(
        ErrorKind::Unsupported,
        "a correlator, δ-function or tensor can only be raised to a positive whole power; \
         negative, fractional and symbolic powers apply to scalar expressions",
    )
}

fn repeat_product(base: &[Mono], n: u32) -> Result<Vec<Mono>> {
    // The whole expansion is counted before it starts: len + len² + … + lenⁿ.
    let rounds = (1..=n).fold(0usize, |total, k| {
        total.saturating_add(base.len().saturating_pow(k))
    });
    crate::budget::spend(rounds)?;
    let mut acc = vec![Mono::scalar(BigRational::one())];
    for _ in 0..n {
        let mut next = Vec::new();
        for a in &acc {
            for b in base {
                next.push(a.mul(b));
            }
        }
        crate::budget::coefficients(&next)?;
        acc = next;
    }
    Ok(acc)
}

/// Collects like terms and builds the normal-form term.
pub fn collect(monos: Vec<Mono>) -> Term {
    // factors → (atoms → coefficient)
    let mut groups: BTreeMap<Vec<Term>, BTreeMap<Atoms, BigRational>> = BTreeMap::new();
    for m in monos {
        if m.coef.is_zero() {
            continue;
        }
        let poly = groups.entry(m.factors).or_default();
        let c = poly.entry(m.atoms).or_insert_with(BigRational::zero);
        *c += m.coef;
    }
    let mut terms = Vec::new();
    for (factors, poly) in groups {
        let poly: BTreeMap<Atoms, BigRational> =
            poly.into_iter().filter(|(_, c)| !c.is_zero()).collect();
        let poly = cancel::cancel_sums(poly);
        if poly.is_empty() {
            continue;
        }
        let mut product = Vec::new();
        match poly_term(poly) {
            Term::Num(c) if c.is_one() && !factors.is_empty() => {}
            Term::Mul(fs) => product.extend(fs),
            coef => product.push(coef),
        }
        product.extend(factors);
        terms.push(single_or(product, Term::Mul, Term::one));
    }
    single_or(terms, Term::Add, Term::zero)
}

/// A polynomial coefficient as a term: a single monomial inline, otherwise a
/// sum whose leading monomial is positive (the sign moves outside).
fn poly_term(poly: BTreeMap<Atoms, BigRational>) -> Term {
    // Monomials with atoms first (in atom order), the constant last:
    // `2 d - 1`, not `-1 + 2 d`.
    let mut ordered: Vec<(&Atoms, &BigRational)> =
        poly.iter().filter(|(a, _)| !a.is_empty()).collect();
    ordered.extend(poly.iter().filter(|(a, _)| a.is_empty()));
    if ordered.len() == 1 {
        let (atoms, c) = ordered[0];
        return monomial::scalar_term(c, atoms);
    }
    // Pull out the atom powers every monomial shares: `(d - 1) g^2`, not
    // `d g^2 - g^2`.
    let common: Atoms = ordered[0]
        .0
        .keys()
        .filter_map(|a| {
            let exps: Option<Vec<&BigRational>> = ordered.iter().map(|(m, _)| m.get(a)).collect();
            let min = exps?.into_iter().min()?.clone();
            Some((a.clone(), min))
        })
        .collect();
    if !common.is_empty() {
        let reduced: BTreeMap<Atoms, BigRational> = poly
            .iter()
            .map(|(atoms, c)| {
                let mut rest = atoms.clone();
                for (a, e) in &common {
                    let left = &rest[a] - e;
                    if left.is_zero() {
                        rest.remove(a);
                    } else {
                        rest.insert(a.clone(), left);
                    }
                }
                (rest, c.clone())
            })
            .collect();
        let mut factors = match poly_term(reduced) {
            Term::Mul(fs) => fs,
            t => vec![t],
        };
        match monomial::scalar_term(&BigRational::one(), &common) {
            Term::Mul(fs) => factors.extend(fs),
            t => factors.push(t),
        }
        return Term::Mul(factors);
    }
    let leading_negative = ordered.first().is_some_and(|(_, c)| c.is_negative());
    let sign = if leading_negative {
        -BigRational::one()
    } else {
        BigRational::one()
    };
    let monos: Vec<Term> = ordered
        .iter()
        .map(|(atoms, c)| monomial::scalar_term(&(*c * &sign), atoms))
        .collect();
    if leading_negative {
        Term::Mul(vec![Term::int(-1), Term::Add(monos)])
    } else {
        Term::Add(monos)
    }
}

fn single_or(mut items: Vec<Term>, many: fn(Vec<Term>) -> Term, none: fn() -> Term) -> Term {
    match items.len() {
        0 => none(),
        1 => items.pop().unwrap_or_else(none),
        _ => many(items),
    }
}
