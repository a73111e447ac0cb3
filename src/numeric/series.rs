//! Truncated series in one or two variables with rational exponents and
//! exact rational coefficients, for block expansions solved order by order
//! (`decompose`, docs/conventions.md §14): the correlator and the blocks
//! are expanded about the channel's limit and matched monomial by
//! monomial, lowest total degree first.
//!
//! A [`Series`] holds its terms below a precision `prec` in the total
//! degree (the sum of the exponents): every term of lower degree is known
//! exactly, nothing is known at or above it. Products and powers carry
//! the precision through (a product of a series known below p with one
//! whose lowest term has degree v is known below p + v; common practice).
//! A power with an exponent that is not a small whole number needs one
//! lowest term c m with c^p rational; anything else (an irrational
//! constant, a function the series does not know, a sum of lowest terms)
//! is `None`, and the caller falls back on a least-squares fit.

use std::collections::BTreeMap;

use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use crate::term::Term;

pub type Q = BigRational;

/// Most terms a series may hold.
pub const MAX_TERMS: usize = 40_000;

/// A truncated series: exponent vector → coefficient (never zero).
#[derive(Clone, Debug, PartialEq)]
pub struct Series {
    pub terms: BTreeMap<Vec<Q>, Q>,
    /// Every term of total degree below `prec` is in `terms`.
    pub prec: Q,
}

pub fn degree(e: &[Q]) -> Q {
    e.iter().fold(Q::zero(), |s, x| s + x)
}

fn q(n: i64) -> Q {
    Q::from_integer(BigInt::from(n))
}

impl Series {
    /// The constant `c` in `n` variables, known to `cap`.
    pub fn constant(c: Q, n: usize, cap: &Q) -> Series {
        Series::monomial(vec![Q::zero(); n], c, cap)
    }

    /// c x^e, known to `cap`.
    pub fn monomial(e: Vec<Q>, c: Q, cap: &Q) -> Series {
        let mut terms = BTreeMap::new();
        if !c.is_zero() && degree(&e) < *cap {
            terms.insert(e, c);
        }
        Series {
            terms,
            prec: cap.clone(),
        }
    }

    /// The lowest total degree of a term (the precision for no term).
    pub fn valuation(&self) -> Q {
        self.terms
            .keys()
            .map(|e| degree(e))
            .min()
            .unwrap_or_else(|| self.prec.clone())
    }

    pub fn coefficient(&self, e: &[Q]) -> Q {
        self.terms.get(e).cloned().unwrap_or_else(Q::zero)
    }

    fn clip(mut self) -> Series {
        let prec = self.prec.clone();
        self.terms.retain(|e, c| !c.is_zero() && degree(e) < prec);
        self
    }

    pub fn add(&self, o: &Series) -> Series {
        let mut terms = self.terms.clone();
        for (e, c) in &o.terms {
            let v = terms.entry(e.clone()).or_insert_with(Q::zero);
            *v += c;
        }
        Series {
            terms,
            prec: self.prec.clone().min(o.prec.clone()),
        }
        .clip()
    }

    pub fn scale(&self, c: &Q) -> Series {
        Series {
            terms: self.terms.iter().map(|(e, v)| (e.clone(), v * c)).collect(),
            prec: self.prec.clone(),
        }
        .clip()
    }

    /// The product, known to the lesser of the two precisions it allows
    /// and `cap`.
    pub fn mul(&self, o: &Series, cap: &Q) -> Option<Series> {
        let prec = (self.prec.clone() + o.valuation())
            .min(o.prec.clone() + self.valuation())
            .min(cap.clone());
        let mut terms: BTreeMap<Vec<Q>, Q> = BTreeMap::new();
        let others: Vec<(Vec<Q>, Q, Q)> = o
            .terms
            .iter()
            .map(|(e, c)| (e.clone(), c.clone(), degree(e)))
            .collect();
        for (e, c) in &self.terms {
            let de = degree(e);
            for (f, k, df) in &others {
                if &de + df >= prec {
                    continue;
                }
                let sum: Vec<Q> = e.iter().zip(f).map(|(a, b)| a + b).collect();
                let v = terms.entry(sum).or_insert_with(Q::zero);
                *v += c * k;
            }
            if terms.len() > MAX_TERMS {
                return None;
            }
        }
        Some(Series { terms, prec }.clip())
    }

    /// The value of a series with only a constant term, known.
    pub fn constant_value(&self) -> Option<Q> {
        if self.prec <= Q::zero() {
            return None;
        }
        let mut out = Q::zero();
        for (e, c) in &self.terms {
            if e.iter().any(|x| !x.is_zero()) {
                return None;
            }
            out = c.clone();
        }
        Some(out)
    }

    /// self^p, known to `cap` at most.
    pub fn pow(&self, p: &Q, n: usize, cap: &Q) -> Option<Series> {
        if p.is_integer() && !p.is_negative() && *p <= q(64) {
            let k = p.to_integer().to_u32()?;
            let mut out = Series::constant(Q::one(), n, cap);
            for _ in 0..k {
                out = out.mul(self, cap)?;
            }
            return Some(out);
        }
        let val = self.valuation();
        let lowest: Vec<(&Vec<Q>, &Q)> = self
            .terms
            .iter()
            .filter(|(e, _)| degree(e) == val)
            .collect();
        let [(m, c)] = lowest[..] else {
            return None;
        };
        let lead = rational_power(c, p)?;
        // T = self/(c m) - 1: relative terms of positive degree.
        let mut t: BTreeMap<Vec<Q>, Q> = BTreeMap::new();
        for (e, v) in &self.terms {
            if e == m {
                continue;
            }
            let shifted: Vec<Q> = e.iter().zip(m).map(|(a, b)| a - b).collect();
            if degree(&shifted) <= Q::zero() {
                return None;
            }
            t.insert(shifted, v / c);
        }
        let rel_cap = (self.prec.clone() - &val).min(cap.clone() - p * &val);
        let t = Series {
            terms: t,
            prec: rel_cap.clone(),
        }
        .clip();
        // (1 + T)^p by degrees: with E the total-degree operator,
        // (1 + T) E(P) = p E(T) P, so that for the part of degree k
        // P_k = Σ_{0<j≤k} (p j - (k - j)) T_j P_{k-j} / k (J. C. P. Miller's
        // recurrence; common practice), one product's work in all.
        let mut by_degree: BTreeMap<Q, Vec<(&Vec<Q>, &Q)>> = BTreeMap::new();
        for (e, c) in &t.terms {
            by_degree.entry(degree(e)).or_default().push((e, c));
        }
        let mut lcm = BigInt::one();
        for d in by_degree.keys() {
            lcm = num_integer::Integer::lcm(&lcm, d.denom());
        }
        if lcm > BigInt::from(1000) {
            return None;
        }
        let step = Q::new(BigInt::one(), lcm);
        let mut parts: BTreeMap<Q, BTreeMap<Vec<Q>, Q>> = BTreeMap::new();
        let mut unit = BTreeMap::new();
        unit.insert(vec![Q::zero(); n], Q::one());
        parts.insert(Q::zero(), unit);
        let mut k = step.clone();
        let mut count = 0usize;
        while k < rel_cap {
            let mut acc: BTreeMap<Vec<Q>, Q> = BTreeMap::new();
            for (j, tj) in by_degree.range(..=k.clone()) {
                let Some(prev) = parts.get(&(&k - j)) else {
                    continue;
                };
                let factor = (p * j - (&k - j)) / &k;
                if factor.is_zero() {
                    continue;
                }
                for (e, c) in tj {
                    let f = &factor * *c;
                    for (e2, c2) in prev {
                        let sum: Vec<Q> = e.iter().zip(e2).map(|(a, b)| a + b).collect();
                        *acc.entry(sum).or_insert_with(Q::zero) += &f * c2;
                    }
                }
            }
            acc.retain(|_, c| !c.is_zero());
            count += acc.len();
            if count > MAX_TERMS {
                return None;
            }
            if !acc.is_empty() {
                parts.insert(k.clone(), acc);
            }
            k += &step;
        }
        let sum = Series {
            terms: parts.into_values().flatten().collect(),
            prec: rel_cap,
        }
        .clip();
        let scaled: Vec<Q> = m.iter().map(|x| x * p).collect();
        let shift = degree(&scaled);
        let terms = sum
            .terms
            .into_iter()
            .map(|(e, v)| {
                (
                    e.iter().zip(&scaled).map(|(a, b)| a + b).collect(),
                    v * &lead,
                )
            })
            .collect();
        Some(
            Series {
                terms,
                prec: (sum.prec + shift).min(cap.clone()),
            }
            .clip(),
        )
    }

    /// Σ |c| t^deg over the terms: the size of the series where every
    /// variable has modulus t.
    pub fn size_at(&self, t: f64) -> f64 {
        self.terms
            .iter()
            .map(|(e, c)| c.to_f64().unwrap_or(f64::INFINITY).abs() * t.powf(to_f64(&degree(e))))
            .sum()
    }
}

pub fn to_f64(x: &Q) -> f64 {
    x.to_f64().unwrap_or(f64::NAN)
}

/// c^p when it is rational (c > 0, or p whole).
pub fn rational_power(c: &Q, p: &Q) -> Option<Q> {
    if c.is_zero() {
        return None;
    }
    let whole = |base: &Q, k: &BigInt| -> Option<Q> {
        let k = k.to_i32()?;
        if k.unsigned_abs() > 4096 {
            return None;
        }
        Some(if k >= 0 {
            num_traits::pow(base.clone(), k as usize)
        } else {
            num_traits::pow(base.recip(), k.unsigned_abs() as usize)
        })
    };
    if p.is_integer() {
        return whole(c, &p.to_integer());
    }
    if c.is_negative() {
        return None;
    }
    let s = p.denom().to_u32()?;
    let root = |x: &BigInt| -> Option<BigInt> {
        let r = x.nth_root(s);
        (num_traits::pow(r.clone(), s as usize) == *x).then_some(r)
    };
    let base = Q::new(root(c.numer())?, root(c.denom())?);
    whole(&base, p.numer())
}

/// The coefficients (a)_k (b)_k/((c)_k k!) of ₂F₁(a, b; c; s x) for k <
/// `terms` (DLMF 15.2.1); `None` where (c)_k vanishes before (a)_k (b)_k.
pub fn hyp2f1_coefficients(a: &Q, b: &Q, c: &Q, s: &Q, terms: usize) -> Option<Vec<Q>> {
    let mut out = Vec::with_capacity(terms);
    let mut v = Q::one();
    for k in 0..terms {
        out.push(v.clone());
        let kq = q(k as i64);
        let num = (a + &kq) * (b + &kq);
        if num.is_zero() {
            out.extend(std::iter::repeat(Q::zero()).take(terms - k - 1));
            break;
        }
        let den = (c + &kq) * (&kq + Q::one());
        if den.is_zero() {
            return None;
        }
        v = v * num / den * s;
    }
    Some(out)
}

/// x_var^offset Σ_k coeffs[k] x_var^k in `n` variables, known to `cap`
/// (the coefficients must reach it).
pub fn power_series(n: usize, var: usize, offset: &Q, coeffs: &[Q], cap: &Q) -> Option<Series> {
    let mut terms = BTreeMap::new();
    for (k, c) in coeffs.iter().enumerate() {
        let mut e = vec![Q::zero(); n];
        e[var] = offset + q(k as i64);
        if degree(&e) >= *cap {
            return Some(
                Series {
                    terms,
                    prec: cap.clone(),
                }
                .clip(),
            );
        }
        if !c.is_zero() {
            terms.insert(e, c.clone());
        }
    }
    let prec = offset + q(coeffs.len() as i64);
    Some(
        Series {
            terms,
            prec: prec.min(cap.clone()),
        }
        .clip(),
    )
}

/// A term as a series: numbers, sums, products, powers with constant
/// exponents; `leaf` gives the series of everything else it knows
/// (variables, parameters, distances, coordinates), `None` for the rest.
pub fn of_term(
    t: &Term,
    n: usize,
    cap: &Q,
    leaf: &dyn Fn(&Term) -> Option<Series>,
) -> Option<Series> {
    match t {
        Term::Num(c) => Some(Series::constant(c.clone(), n, cap)),
        Term::Add(ts) => {
            let mut out = Series::constant(Q::zero(), n, cap);
            for s in ts {
                out = out.add(&of_term(s, n, cap, leaf)?);
            }
            Some(out)
        }
        Term::Mul(ts) => {
            let mut out = Series::constant(Q::one(), n, cap);
            for s in ts {
                out = out.mul(&of_term(s, n, cap, leaf)?, cap)?;
            }
            Some(out)
        }
        Term::Pow(b, e) => {
            let p = of_term(e, n, cap, leaf)?.constant_value()?;
            if p.is_zero() {
                return Some(Series::constant(Q::one(), n, cap));
            }
            of_term(b, n, cap, leaf)?.pow(&p, n, cap)
        }
        _ => leaf(t),
    }
}

/// One basis function of an expansion: its series and the monomial that
/// leads it (its coefficient there is not zero).
#[derive(Clone, Debug)]
pub struct Basis {
    pub pivot: Vec<Q>,
    pub series: Series,
}

/// The coefficients found, and what of the correlator's series no basis
/// function matched.
#[derive(Clone, Debug)]
pub struct Matched {
    /// One per basis function, in the order given.
    pub coefficients: Vec<Q>,
    /// Monomials inside the span of the basis that G needs and no given
    /// basis function leads (there must be none for an expansion), with
    /// their coefficients: blocks missing from the list, or terms no block
    /// can lead.
    pub unmatched: Vec<(Vec<Q>, Q)>,
    /// The truncation: blocks beyond the span that G needs below the top
    /// degree (their leading monomials and coefficients) and the
    /// remainder's terms above it.
    pub beyond: Series,
}

/// Solves g = Σ c_k basis_k order by order: the lowest kept monomial of
/// what is left (total degree ≤ `top`) is read off by the basis function
/// it leads; where none of the given ones does, `make` builds the block it
/// leads (a block G needs that the list leaves out: unmatched when
/// `inside` the span, the truncation of a tower otherwise), and a monomial
/// no block leads is unmatched. Only monomials `keep` accepts are looked at
/// (one of each pair z^a z̄^b, z^b z̄^a of a symmetric series). Each basis
/// function's kept monomials must lie at or above its pivot's degree, the
/// pivot alone at that degree. `None` when a precision is too low for
/// `top` or a pivot's coefficient is zero.
pub fn solve(
    g: &Series,
    bases: &[Basis],
    top: &Q,
    keep: &dyn Fn(&[Q]) -> bool,
    inside: &dyn Fn(&[Q]) -> bool,
    make: &dyn Fn(&[Q]) -> Option<Series>,
) -> Option<Matched> {
    if g.prec <= *top || bases.iter().any(|b| b.series.prec <= *top) {
        return None;
    }
    let pivots: BTreeMap<&Vec<Q>, usize> = bases
        .iter()
        .enumerate()
        .map(|(k, b)| (&b.pivot, k))
        .collect();
    let mut rest = g.clone();
    let mut coefficients = vec![Q::zero(); bases.len()];
    let mut unmatched = Vec::new();
    let mut outside: BTreeMap<Vec<Q>, Q> = BTreeMap::new();
    let mut skipped = std::collections::BTreeSet::new();
    for _ in 0..100_000 {
        let next = rest
            .terms
            .iter()
            .filter(|(e, _)| keep(e) && !skipped.contains(*e))
            .map(|(e, c)| (degree(e), e, c))
            .filter(|(d, _, _)| d <= top)
            .min_by(|a, b| a.0.cmp(&b.0).then_with(|| a.1.cmp(b.1)));
        let Some((_, m, c)) = next else {
            let mut beyond: BTreeMap<Vec<Q>, Q> = rest
                .terms
                .iter()
                .filter(|(e, _)| keep(e))
                .map(|(e, c)| (e.clone(), c.clone()))
                .filter(|(e, _)| degree(e) > *top)
                .collect();
            for (e, c) in outside {
                *beyond.entry(e).or_insert_with(Q::zero) += c;
            }
            return Some(Matched {
                coefficients,
                unmatched,
                beyond: Series {
                    terms: beyond,
                    prec: rest.prec,
                },
            });
        };
        let (m, c) = (m.clone(), c.clone());
        if let Some(&k) = pivots.get(&m) {
            let lead = bases[k].series.coefficient(&m);
            if lead.is_zero() {
                return None;
            }
            let x = c / lead;
            rest = rest.add(&bases[k].series.scale(&(-&x)));
            coefficients[k] += x;
            continue;
        }
        match make(&m) {
            Some(block) if block.prec > *top && !block.coefficient(&m).is_zero() => {
                let x = c / block.coefficient(&m);
                rest = rest.add(&block.scale(&(-&x)));
                if inside(&m) {
                    unmatched.push((m, x));
                } else {
                    outside.insert(m, x);
                }
            }
            _ => {
                unmatched.push((m.clone(), c));
                skipped.insert(m);
            }
        }
    }
    None
}

/// The exact text of a rational: `p` or `p/q`.
pub fn text(x: &Q) -> String {
    if x.is_integer() {
        x.numer().to_string()
    } else {
        format!("{}/{}", x.numer(), x.denom())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn r(a: i64, b: i64) -> Q {
        Q::new(a.into(), b.into())
    }

    #[test]
    fn binomial_series_of_a_fractional_power() {
        // (1 + x)^(1/2) = 1 + x/2 - x²/8 + x³/16 - … (common practice).
        let cap = q(4);
        let s = Series::constant(Q::one(), 1, &cap).add(&Series::monomial(vec![q(1)], q(1), &cap));
        let p = s.pow(&r(1, 2), 1, &cap).unwrap();
        assert_eq!(p.coefficient(&[q(0)]), q(1));
        assert_eq!(p.coefficient(&[q(1)]), r(1, 2));
        assert_eq!(p.coefficient(&[q(2)]), r(-1, 8));
        assert_eq!(p.coefficient(&[q(3)]), r(1, 16));
        assert_eq!(p.prec, q(4));
    }

    #[test]
    fn leading_monomials_and_precision() {
        // (4/x + 4)^(-1/2) = (x/4)^(1/2) (1 + x)^(-1/2): known below 5/2 when
        // the base is known below 2.
        let cap = q(2);
        let s = Series::monomial(vec![q(-1)], q(4), &cap).add(&Series::constant(q(4), 1, &cap));
        let p = s.pow(&r(-1, 2), 1, &cap).unwrap();
        assert_eq!(p.coefficient(&[r(1, 2)]), r(1, 2));
        assert_eq!(p.coefficient(&[r(3, 2)]), r(-1, 4));
        assert_eq!(p.prec, q(2));
        // 2^(1/2) is not rational.
        assert!(rational_power(&q(2), &r(1, 2)).is_none());
        assert_eq!(rational_power(&r(9, 4), &r(-3, 2)), Some(r(8, 27)));
    }

    #[test]
    fn a_triangular_solve_finds_the_coefficients() {
        // g = 3 + 2 x/(1 - x) in the bases 1 and x/(1 - x).
        let cap = q(6);
        let one = Series::constant(Q::one(), 1, &cap);
        let geometric = one
            .add(&Series::monomial(vec![q(1)], q(-1), &cap))
            .pow(&q(-1), 1, &cap)
            .unwrap();
        let x = Series::monomial(vec![q(1)], q(1), &cap);
        let b = x.mul(&geometric, &cap).unwrap();
        let g = one.scale(&q(3)).add(&b.scale(&q(2)));
        let bases = [
            Basis {
                pivot: vec![q(0)],
                series: one,
            },
            Basis {
                pivot: vec![q(1)],
                series: b,
            },
        ];
        let m = solve(&g, &bases, &q(1), &|_| true, &|e| e[0] <= q(1), &|_| None).unwrap();
        assert_eq!(m.coefficients, vec![q(3), q(2)]);
        assert!(m.unmatched.is_empty() && m.beyond.terms.is_empty());
    }
}
