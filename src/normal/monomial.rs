//! Monomials: an exact rational, a product of scalar atoms with rational
//! exponents, and a product of non-scalar factors.

use std::collections::BTreeMap;

use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use crate::diagnostic::{Error, ErrorKind, Result};
use crate::term::Term;

/// Scalar atoms (parameters, `d`, powers of sums) → exponent.
pub type Atoms = BTreeMap<Term, BigRational>;

/// One product: `coef · Π atom^exp · Π factors`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Mono {
    pub coef: BigRational,
    pub atoms: Atoms,
    /// Non-scalar factors; sorted when the monomial is finished.
    pub factors: Vec<Term>,
}

impl Mono {
    pub fn scalar(c: BigRational) -> Mono {
        Mono {
            coef: c,
            atoms: Atoms::new(),
            factors: Vec::new(),
        }
    }

    pub fn atom(a: Term, exp: BigRational) -> Mono {
        Mono {
            coef: BigRational::one(),
            atoms: Atoms::from([(a, exp)]),
            factors: Vec::new(),
        }
    }

    pub fn factor(f: Term) -> Mono {
        Mono {
            coef: BigRational::one(),
            atoms: Atoms::new(),
            factors: vec![f],
        }
    }

    pub fn mul(&self, other: &Mono) -> Mono {
        let mut atoms = self.atoms.clone();
        for (a, e) in &other.atoms {
            let slot = atoms.entry(a.clone()).or_insert_with(BigRational::zero);
            *slot += e;
            if slot.is_zero() {
                atoms.remove(a);
            }
        }
        let mut factors = self.factors.clone();
        factors.extend(other.factors.iter().cloned());
        Mono {
            coef: &self.coef * &other.coef,
            atoms,
            factors,
        }
    }

    /// Multiplies by a scalar term given as monomials (e.g. `d - 1`).
    pub fn times_all(&self, scalars: &[Mono]) -> Vec<Mono> {
        scalars.iter().map(|s| self.mul(s)).collect()
    }

    /// `self^q` for a scalar monomial.
    pub fn scalar_power(&self, q: &BigRational) -> Result<Mono> {
        let mut atoms = Atoms::new();
        for (a, e) in &self.atoms {
            let e = e * q;
            if !e.is_zero() {
                atoms.insert(a.clone(), e);
            }
        }
        let mut out = Mono {
            coef: BigRational::one(),
            atoms,
            factors: Vec::new(),
        };
        if self.coef.is_zero() {
            return if q.is_positive() {
                Ok(Mono::scalar(BigRational::zero()))
            } else {
                Err(Error::new(
                    ErrorKind::Arithmetic,
                    "division by zero: zero raised to a negative power",
                ))
            };
        }
        match q.is_integer().then(|| q.to_i32()).flatten() {
            Some(n)
                if n.unsigned_abs() <= 4096
                    && crate::budget::power_fits(&self.coef, u64::from(n.unsigned_abs())) =>
            {
                let p = num_traits::pow(self.coef.clone(), n.unsigned_abs() as usize);
                out.coef = if n < 0 { p.recip() } else { p };
            }
            _ => {
                // c^q with q non-integer: keep exact by leaving the number as
                // an atom, with its sign pulled out when q has odd denominator.
                let c = self.coef.clone();
                if !c.is_one() {
                    let e = out
                        .atoms
                        .entry(Term::Num(c))
                        .or_insert_with(BigRational::zero);
                    *e += q;
                }
            }
        }
        Ok(out)
    }
}

/// A scalar monomial as a term: `c`, `atom`, or `Mul[c, atom^e, …]`.
pub fn scalar_term(c: &BigRational, atoms: &Atoms) -> Term {
    let mut fs = Vec::new();
    if !c.is_one() || atoms.is_empty() {
        fs.push(Term::Num(c.clone()));
    }
    for (a, e) in atoms {
        if e.is_one() {
            fs.push(a.clone());
        } else if let Some(folded) = fold_symbolic_power(a, e) {
            // (a^R)^e reads as a^(e R).
            fs.push(folded);
        } else {
            fs.push(Term::Pow(
                Box::new(a.clone()),
                Box::new(Term::Num(e.clone())),
            ));
        }
    }
    if fs.len() == 1 {
        fs.pop().unwrap_or_else(Term::one)
    } else {
        Term::Mul(fs)
    }
}

/// `(b^R)^e` as `b^(e R)` for a symbolic exponent R.
fn fold_symbolic_power(a: &Term, e: &BigRational) -> Option<Term> {
    let Term::Pow(base, r) = a else {
        return None;
    };
    if matches!(**r, Term::Num(_)) {
        return None;
    }
    let scaled: super::cancel::Poly = super::cancel::scalar_poly(r)?
        .into_iter()
        .map(|(atoms, c)| (atoms, c * e))
        .collect();
    Some(Term::Pow(base.clone(), Box::new(super::poly_term(scaled))))
}

#[allow(dead_code)]
fn int(n: i64) -> BigRational {
    BigRational::from_integer(BigInt::from(n))
}
