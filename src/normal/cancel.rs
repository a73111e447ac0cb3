//! Cancelling a sum against its own inverse power: a coefficient such as
//! `(2 d - 4)/(d - 2)` or `(d^2 - 4)/(d - 2)` is an exact quotient and
//! becomes `2` or `d + 2`. Coefficients are Laurent polynomials in scalar
//! atoms; the division is long division in lexicographic order and is kept
//! only when it leaves no remainder.

use std::cmp::Ordering;
use std::collections::BTreeMap;

use num_rational::BigRational;
use num_traits::{One, Zero};

use super::monomial::Atoms;
use crate::term::Term;

/// A polynomial coefficient: atoms → exact rational.
pub type Poly = BTreeMap<Atoms, BigRational>;

/// Long division steps allowed per quotient term of the dividend (the
/// division of polynomials finishes well within it; Laurent monomials
/// could otherwise go on).
const STEPS_PER_TERM: usize = 4;

/// Largest sum divided out, in terms.
const MAX_DIVISOR_TERMS: usize = 8;

/// Largest coefficient polynomial tried, in terms.
const MAX_DIVIDEND_TERMS: usize = 64;

/// Cancels sum atoms against their inverse powers, as far as the division
/// is exact: over the common denominator P^e of every monomial carrying
/// the atom P (to whole powers), the numerator is divided by P as often as
/// it goes, up to e times. The common-denominator form is kept when a
/// division went or it has fewer terms; otherwise nothing changes.
pub fn cancel_sums(mut poly: Poly) -> Poly {
    let mut tried: Vec<Term> = Vec::new();
    // Each success lowers the power of one atom; each failure is tried
    // once per success. The bound guards against surprises.
    for _ in 0..64 {
        let candidate = poly.keys().find_map(|atoms| {
            atoms.iter().find_map(|(key, exp)| {
                let fits = matches!(key, Term::Add(_) | Term::Mul(_))
                    && exp.is_integer()
                    && exp < &BigRational::zero()
                    && !tried.contains(key);
                fits.then(|| key.clone())
            })
        });
        let Some(key) = candidate else {
            return poly;
        };
        tried.push(key.clone());
        if let Some(reduced) = cancel_one(&poly, &key) {
            poly = reduced;
            tried.clear();
        }
    }
    poly
}

/// One atom P: the polynomial over the common power P^-e with the
/// numerator divided by P as often as it goes; `None` when that cancels
/// nothing, or when P appears to a fractional power.
fn cancel_one(poly: &Poly, key: &Term) -> Option<Poly> {
    let divisor = scalar_poly(key)?;
    // Sums of parameters only ((d - 1), (Delta + 2), …): sums of
    // coordinates and distances (image distances of a wall) are left as
    // they are, where long division would be costly and rarely exact.
    let parameters_only = divisor
        .keys()
        .flat_map(|atoms| atoms.keys())
        .all(|a| matches!(a, Term::Sym(_)));
    if !parameters_only || divisor.len() > MAX_DIVISOR_TERMS || poly.len() > MAX_DIVIDEND_TERMS {
        return None;
    }
    let exponent = |atoms: &Atoms| atoms.get(key).cloned().unwrap_or_else(BigRational::zero);
    if poly.keys().any(|a| !exponent(a).is_integer()) {
        return None;
    }
    let e = poly.keys().map(|a| -exponent(a)).max()?.to_integer();
    let e: usize = e.try_into().ok().filter(|e| *e >= 1 && *e <= 8)?;
    // Numerator: each monomial times P^(its exponent + e), P expanded.
    let mut powers = vec![Poly::from([(Atoms::new(), BigRational::one())])];
    let mut numerator = Poly::new();
    for (atoms, c) in poly {
        let k: usize = (exponent(atoms).to_integer() + num_bigint::BigInt::from(e))
            .try_into()
            .ok()?;
        if k > 16 {
            return None;
        }
        while powers.len() <= k {
            let next = multiply(powers.last()?, &divisor);
            powers.push(next);
        }
        let mut rest = atoms.clone();
        rest.remove(key);
        let term = Poly::from([(rest, c.clone())]);
        for (m, v) in multiply(&term, &powers[k]) {
            *numerator.entry(m).or_insert_with(BigRational::zero) += v;
        }
    }
    numerator.retain(|_, c| !c.is_zero());
    let mut divisions = 0;
    while divisions < e {
        match divide(&numerator, &divisor) {
            Some(q) => {
                numerator = q;
                divisions += 1;
            }
            None => break,
        }
    }
    // Over the common denominator only when something cancelled: a
    // division, or fewer terms than before.
    if divisions == 0 && numerator.len() >= poly.len() {
        return None;
    }
    let left = BigRational::from_integer(num_bigint::BigInt::from(divisions as i64 - e as i64));
    Some(
        numerator
            .into_iter()
            .map(|(mut atoms, c)| {
                if !left.is_zero() {
                    atoms.insert(key.clone(), left.clone());
                }
                (atoms, c)
            })
            .collect(),
    )
}

/// A scalar normal-form term back as a polynomial in its atoms.
pub(super) fn scalar_poly(t: &Term) -> Option<Poly> {
    match t {
        Term::Num(c) => Some(Poly::from([(Atoms::new(), c.clone())])),
        Term::Add(ts) => {
            let mut out = Poly::new();
            for t in ts {
                for (atoms, c) in scalar_poly(t)? {
                    *out.entry(atoms).or_insert_with(BigRational::zero) += c;
                }
            }
            out.retain(|_, c| !c.is_zero());
            Some(out)
        }
        Term::Mul(ts) => {
            let mut out = Poly::from([(Atoms::new(), BigRational::one())]);
            for t in ts {
                out = multiply(&out, &scalar_poly(t)?);
            }
            Some(out)
        }
        // Atoms carry rational exponents; a symbolic power is one atom.
        Term::Pow(base, e) => Some(match &**e {
            Term::Num(q) => Poly::from([(
                Atoms::from([((**base).clone(), q.clone())]),
                BigRational::one(),
            )]),
            _ => Poly::from([(
                Atoms::from([(t.clone(), BigRational::one())]),
                BigRational::one(),
            )]),
        }),
        atom => Some(Poly::from([(
            Atoms::from([(atom.clone(), BigRational::one())]),
            BigRational::one(),
        )])),
    }
}

fn multiply(a: &Poly, b: &Poly) -> Poly {
    let mut out = Poly::new();
    for (ma, ca) in a {
        for (mb, cb) in b {
            *out.entry(times(ma, mb, 1))
                .or_insert_with(BigRational::zero) += ca * cb;
        }
    }
    out.retain(|_, c| !c.is_zero());
    out
}

/// `a · b^sign` for monomials (sign ±1).
fn times(a: &Atoms, b: &Atoms, sign: i32) -> Atoms {
    let mut out = a.clone();
    for (k, e) in b.shared() {
        let slot = out.entry_or_zero(k.clone());
        if sign > 0 {
            *slot += e;
        } else {
            *slot -= e;
        }
        if slot.is_zero() {
            out.remove(k);
        }
    }
    out
}

/// Lexicographic monomial order: at the first atom (in atom order) whose
/// exponents differ, the larger exponent is the larger monomial (a missing
/// atom has exponent 0). Both maps are sorted, so one merged pass does.
fn lex(a: &Atoms, b: &Atoms) -> Ordering {
    let zero = BigRational::zero();
    let mut left = a.iter().peekable();
    let mut right = b.iter().peekable();
    loop {
        let (ea, eb) = match (left.peek(), right.peek()) {
            (None, None) => return Ordering::Equal,
            (Some((ka, ea)), Some((kb, eb))) => match ka.cmp(kb) {
                Ordering::Equal => {
                    let pair = (*ea, *eb);
                    left.next();
                    right.next();
                    pair
                }
                Ordering::Less => {
                    let pair = (*ea, &zero);
                    left.next();
                    pair
                }
                Ordering::Greater => {
                    let pair = (&zero, *eb);
                    right.next();
                    pair
                }
            },
            (Some((_, ea)), None) => {
                let pair = (*ea, &zero);
                left.next();
                pair
            }
            (None, Some((_, eb))) => {
                let pair = (&zero, *eb);
                right.next();
                pair
            }
        };
        match ea.cmp(eb) {
            Ordering::Equal => continue,
            other => return other,
        }
    }
}

fn leading(p: &Poly) -> Option<(&Atoms, &BigRational)> {
    p.iter().max_by(|(a, _), (b, _)| lex(a, b))
}

/// `dividend / divisor` when it is exact; `None` otherwise.
fn divide(dividend: &Poly, divisor: &Poly) -> Option<Poly> {
    let (lead_atoms, lead_coef) = leading(divisor)?;
    if divisor.len() < 2 {
        return None;
    }
    // In an exact division every leading monomial met stays at or above
    // lowest(dividend) = lowest(quotient) · lowest(divisor); below it the
    // remainder can no longer cancel.
    let lowest = dividend.keys().min_by(|a, b| lex(a, b))?.clone();
    let mut rest = dividend.clone();
    let mut quotient = Poly::new();
    for _ in 0..STEPS_PER_TERM * (dividend.len() + 1) {
        let Some((atoms, c)) = leading(&rest) else {
            return Some(quotient);
        };
        if lex(atoms, &lowest) == Ordering::Less {
            return None;
        }
        let t_atoms = times(atoms, lead_atoms, -1);
        let t_coef = c / lead_coef;
        let term = Poly::from([(t_atoms.clone(), t_coef.clone())]);
        for (m, k) in multiply(&term, divisor) {
            let slot = rest.entry(m.clone()).or_insert_with(BigRational::zero);
            *slot -= k;
            if slot.is_zero() {
                rest.remove(&m);
            }
        }
        *quotient.entry(t_atoms).or_insert_with(BigRational::zero) += t_coef;
    }
    rest.is_empty().then_some(quotient)
}

/// Most monomials a coefficient may have for [`vanishes`] to try it.
const MAX_VANISH_TERMS: usize = 4096;
/// Most monomials the numerator over the common denominator may reach.
const MAX_VANISH_PRODUCT: usize = 200_000;

/// True if the coefficient is zero as a rational function: over the
/// product of its denominators (the sums it carries to negative whole
/// powers, each to the highest power it has), with every sum carried to a
/// whole power multiplied out, the numerator has no monomial left. The
/// other atoms (parameters, distances, symbolic powers, functions) are
/// taken as independent variables, so a zero numerator is a zero function
/// wherever the denominators are not zero; a numerator that is not zero
/// proves nothing (`false`), nor does a coefficient past the size limits.
pub(super) fn vanishes(poly: &Poly) -> bool {
    let mut current = poly.clone();
    // Sums inside sums: a few rounds clear nested denominators.
    for _ in 0..3 {
        if current.is_empty() {
            return true;
        }
        if current.len() > MAX_VANISH_TERMS {
            return false;
        }
        match clear_denominators(&current) {
            Some(next) if next != current => current = next,
            _ => return current.is_empty(),
        }
    }
    current.is_empty()
}

/// One round of [`vanishes`]: the numerator over the common denominator,
/// sums to whole powers expanded; `None` past the limits.
fn clear_denominators(poly: &Poly) -> Option<Poly> {
    // The sums carried to whole powers, and the highest inverse power of each.
    let mut sums: BTreeMap<Term, (Poly, i64)> = BTreeMap::new();
    for atoms in poly.keys() {
        for (key, e) in atoms {
            if !matches!(key, Term::Add(_) | Term::Mul(_)) || !e.is_integer() {
                continue;
            }
            let Some(p) = scalar_poly(key) else { continue };
            let e = num_traits::ToPrimitive::to_i64(&e.to_integer())?;
            let entry = sums.entry(key.clone()).or_insert((p, 0));
            entry.1 = entry.1.max(-e);
        }
    }
    if sums.is_empty() || sums.len() > 8 || sums.values().any(|(_, e)| *e > 8) {
        return (sums.is_empty()).then(|| poly.clone());
    }
    let mut out = Poly::new();
    let mut spent = 0usize;
    for (atoms, c) in poly {
        let mut term = Poly::from([(Atoms::new(), c.clone())]);
        let mut rest = atoms.clone();
        for (key, (p, lift)) in &sums {
            // A whole power of the sum is multiplied out; a fractional one
            // stays an atom. Either way the monomial is lifted over the
            // common denominator.
            let own = match atoms.get(key) {
                Some(e) if e.is_integer() => {
                    rest.remove(key);
                    num_traits::ToPrimitive::to_i64(&e.to_integer())?
                }
                _ => 0,
            };
            for _ in 0..own + lift {
                term = multiply(&term, p);
                spent = spent.saturating_add(term.len());
            }
            if spent > MAX_VANISH_PRODUCT {
                return None;
            }
        }
        let term = multiply(&term, &Poly::from([(rest, BigRational::one())]));
        for (m, v) in term {
            *out.entry(m).or_insert_with(BigRational::zero) += v;
        }
        if out.len() > MAX_VANISH_PRODUCT {
            return None;
        }
    }
    out.retain(|_, c| !c.is_zero());
    Some(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sym(s: &str) -> Term {
        Term::Sym(s.into())
    }
    fn q(n: i64) -> BigRational {
        BigRational::from_integer(n.into())
    }

    #[test]
    fn exact_quotients_cancel_and_others_stay() {
        // (d - 2) as the atom's base; plain functions rather than closures
        // (a closure capturing the base here miscompiled at opt-level 2 with
        // this toolchain: the test crashed in release builds only).
        fn inv(mut a: Atoms) -> Atoms {
            a.insert(Term::Add(vec![sym("d"), Term::Num(q(-2))]), q(-1));
            a
        }
        fn d(e: i64) -> Atoms {
            let mut a = Atoms::new();
            a.insert(sym("d"), q(e));
            a
        }
        // (d^2 - 4)/(d - 2) = d + 2
        let p = Poly::from([(inv(d(2)), q(1)), (inv(Atoms::new()), q(-4))]);
        assert_eq!(
            cancel_sums(p),
            Poly::from([(d(1), q(1)), (Atoms::new(), q(2))])
        );
        // (2 d - 4)/(d - 2) = 2
        let p = Poly::from([(inv(d(1)), q(2)), (inv(Atoms::new()), q(-4))]);
        assert_eq!(cancel_sums(p), Poly::from([(Atoms::new(), q(2))]));
        // 1 + (d - 2)/(d - 2) = 2
        let p = Poly::from([
            (Atoms::new(), q(1)),
            (inv(d(1)), q(1)),
            (inv(Atoms::new()), q(-2)),
        ]);
        assert_eq!(cancel_sums(p), Poly::from([(Atoms::new(), q(2))]));
        // (d - 1)/(d - 2) stays as it is.
        let p = Poly::from([(inv(d(1)), q(1)), (inv(Atoms::new()), q(-1))]);
        assert_eq!(cancel_sums(p.clone()), p);
    }
}
