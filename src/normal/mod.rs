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
mod distance;
mod integrate;
mod monomial;

use std::collections::BTreeMap;

use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use crate::context::Context;
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::term::{Index, Point, Term};
pub use monomial::{Atoms, Mono};

/// Puts `t` in contact-term normal form.
pub fn normalize(ctx: &Context, t: &Term) -> Result<Term> {
    let _work = crate::budget::Work::enter();
    let monos = merge(canonical(ctx, expand(ctx, t)?));
    let has_distance = monos
        .iter()
        .any(|m| m.atoms.keys().any(|a| matches!(a, Term::Dist(..))));
    let plain = collect(monos.clone());
    if !has_distance {
        return Ok(plain);
    }
    // Over a common power of each distance, terms that cancel by the
    // algebra of distances do; keep that form when it is no longer.
    let common_monos = merge(canonical(ctx, distance::common_powers(ctx, monos.clone())?));
    let common = collect(common_monos.clone());
    let (mut best, mut best_monos) = if term_count(&common) <= term_count(&plain) {
        (common, common_monos.len())
    } else {
        (plain, monos.len())
    };
    // p·p - 2 p·q + q·q back into |p - q|², when that is shorter still.
    let distances: std::collections::BTreeSet<Term> = monos
        .iter()
        .flat_map(|m| m.atoms.keys())
        .filter(|a| matches!(a, Term::Dist(..)))
        .cloned()
        .collect();
    for dist in &distances {
        let Term::Dist(p, q) = dist else { continue };
        for eliminate in [p, q] {
            if let Some(folded) = distance::dot_to_distance(&monos, dist, eliminate) {
                // Fewer monomials, not fewer printed terms: a sum can
                // collect into one product with a long coefficient.
                // Only a complete fold: no coordinate of p or q left with a
                // summed index, so that normalising again keeps it.
                let folded = merge(canonical(ctx, folded));
                let dotted = folded.iter().any(|m| {
                    m.factors.iter().any(|f| {
                        matches!(f, Term::Comp(x, Index::Named(_))
                            if x.name == p.name || x.name == q.name)
                    })
                });
                if !dotted && folded.len() < best_monos {
                    best_monos = folded.len();
                    best = collect(folded);
                }
            }
        }
    }
    Ok(best)
}

/// Contracts indices and renames summed indices canonically.
fn canonical(ctx: &Context, monos: Vec<Mono>) -> Vec<Mono> {
    let mut out = Vec::new();
    for m in monos {
        for m in contract::contract(ctx, m) {
            out.push(contract::canonical_dummies(ctx, m));
        }
    }
    out
}

/// Adds up monomials that differ only in their coefficient.
/// The order of the result is unspecified; `collect` sorts.
pub(super) fn merge(monos: Vec<Mono>) -> Vec<Mono> {
    let mut sums: std::collections::HashMap<(Atoms, Vec<Term>), BigRational> =
        std::collections::HashMap::with_capacity(monos.len());
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

fn term_count(t: &Term) -> usize {
    match t {
        Term::Add(ts) => ts.len(),
        t if t.is_zero() => 0,
        _ => 1,
    }
}

/// Expands a term into a list of monomials (not yet collected).
fn expand(ctx: &Context, t: &Term) -> Result<Vec<Mono>> {
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
            let mut out = Vec::new();
            for m in expand(ctx, body)? {
                let d = calculus::differentiate(ctx, i, p, m)?;
                crate::budget::spend(d.len())?;
                out.extend(d);
            }
            out
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
        Term::Fun(name, order, args) => {
            let args = args
                .iter()
                .map(|a| normalize(ctx, a))
                .collect::<Result<Vec<_>>>()?;
            vec![Mono::atom(
                Term::Fun(name.clone(), *order, args),
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
        Term::Integral(integral) => integrate::integral(ctx, integral)?,
    })
}

/// The coordinate p[i]: a scalar atom for the normal coordinate, zero for
/// the normal coordinate of a point on the boundary (a boundary point or a
/// projection x∥), a factor otherwise.
fn coordinate(ctx: &Context, p: &Point, i: &Index) -> Result<Vec<Mono>> {
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

fn power(ctx: &Context, b: &Term, e: &Term) -> Result<Vec<Mono>> {
    let e = normalize(ctx, e)?;
    let base = expand(ctx, b)?;
    let Term::Num(q) = &e else {
        // A symbolic exponent: a monomial's atoms each get their own power;
        // anything else stays whole, as a scalar atom.
        if base.iter().any(|m| !m.factors.is_empty()) {
            return Err(unsupported_power());
        }
        if let [single] = &base[..] {
            return symbolic_power(ctx, single, &e).map(|m| vec![m]);
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
        return base[0].scalar_power(q).map(|m| vec![m]);
    }
    if q.is_integer() && q.is_positive() {
        if let Some(n) = q.to_u32().filter(|n| *n <= MAX_EXPANDED_POWER) {
            return repeat_product(&base, n);
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

/// True for the summation-index names normalisation generates (`k1`, …).
pub fn is_generated_index(name: &str) -> bool {
    name.strip_prefix('k')
        .is_some_and(|digits| !digits.is_empty() && digits.chars().all(|c| c.is_ascii_digit()))
}

/// `m^E` for a scalar monomial and a symbolic exponent E: each atom a^r
/// becomes a^k · (a^(rE - k)) with k the rational part of rE, so that
/// powers differing by a number share one symbolic atom.
fn symbolic_power(ctx: &Context, m: &Mono, e: &Term) -> Result<Mono> {
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
fn primitive_part(ctx: &Context, t: &Term) -> Result<(BigRational, Term)> {
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
