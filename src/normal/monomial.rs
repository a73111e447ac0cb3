//! Monomials: an exact rational, a product of scalar atoms with rational
//! exponents, and a product of non-scalar factors.

use std::sync::Arc;

use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use crate::diagnostic::{Error, ErrorKind, Result};
use crate::term::Term;

/// A scalar atom, shared: cloning a monomial copies pointers, not terms.
pub type Atom = Arc<Term>;

/// Scalar atoms (parameters, `d`, powers of sums) → exponent: a map kept
/// as a vector sorted by atom, so that the product of two monomials is a
/// linear merge. It orders, compares and iterates as a `BTreeMap<Term,
/// BigRational>` would (lexicographically by (atom, exponent) pairs), so
/// normal forms come out in the same order.
#[derive(Clone, Debug, Default, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Atoms(Vec<(Atom, BigRational)>);

impl Atoms {
    pub fn new() -> Atoms {
        Atoms(Vec::new())
    }

    pub fn len(&self) -> usize {
        self.0.len()
    }

    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    pub fn clear(&mut self) {
        self.0.clear();
    }

    fn find(&self, k: &Term) -> std::result::Result<usize, usize> {
        self.0.binary_search_by(|(a, _)| (**a).cmp(k))
    }

    pub fn get(&self, k: &Term) -> Option<&BigRational> {
        self.find(k).ok().map(|i| &self.0[i].1)
    }

    pub fn contains_key(&self, k: &Term) -> bool {
        self.find(k).is_ok()
    }

    /// Sets the exponent of `k`, returning the one it replaces.
    pub fn insert(
        &mut self,
        k: impl Into<Atom> + std::borrow::Borrow<Term>,
        e: BigRational,
    ) -> Option<BigRational> {
        match self.find(k.borrow()) {
            Ok(i) => Some(std::mem::replace(&mut self.0[i].1, e)),
            Err(i) => {
                self.0.insert(i, (k.into(), e));
                None
            }
        }
    }

    pub fn remove(&mut self, k: &Term) -> Option<BigRational> {
        self.find(k).ok().map(|i| self.0.remove(i).1)
    }

    /// The exponent of `k`, inserted as zero when missing (a zero stays,
    /// as with a map's entry).
    pub fn entry_or_zero(
        &mut self,
        k: impl Into<Atom> + std::borrow::Borrow<Term>,
    ) -> &mut BigRational {
        let i = match self.find(k.borrow()) {
            Ok(i) => i,
            Err(i) => {
                self.0.insert(i, (k.into(), BigRational::zero()));
                i
            }
        };
        &mut self.0[i].1
    }

    pub fn iter(
        &self,
    ) -> impl DoubleEndedIterator<Item = (&Term, &BigRational)> + ExactSizeIterator + Clone {
        self.0.iter().map(|(a, e)| (&**a, e))
    }

    /// The atoms with their shared handles (cheap to clone).
    pub fn shared(&self) -> impl Iterator<Item = (&Atom, &BigRational)> {
        self.0.iter().map(|(a, e)| (a, e))
    }

    pub fn keys(&self) -> impl DoubleEndedIterator<Item = &Term> + ExactSizeIterator + Clone {
        self.0.iter().map(|(a, _)| &**a)
    }

    pub fn values(
        &self,
    ) -> impl DoubleEndedIterator<Item = &BigRational> + ExactSizeIterator + Clone {
        self.0.iter().map(|(_, e)| e)
    }

    /// The product of two sets of atoms: exponents added, zeros dropped.
    pub fn times(&self, other: &Atoms) -> Atoms {
        if other.0.is_empty() {
            return self.clone();
        }
        if self.0.is_empty() {
            return other.clone();
        }
        let (a, b) = (&self.0, &other.0);
        let mut out = Vec::with_capacity(a.len() + b.len());
        let (mut i, mut j) = (0, 0);
        while i < a.len() && j < b.len() {
            match a[i].0.cmp(&b[j].0) {
                std::cmp::Ordering::Less => {
                    out.push(a[i].clone());
                    i += 1;
                }
                std::cmp::Ordering::Greater => {
                    out.push(b[j].clone());
                    j += 1;
                }
                std::cmp::Ordering::Equal => {
                    let e = &a[i].1 + &b[j].1;
                    if !e.is_zero() {
                        out.push((a[i].0.clone(), e));
                    }
                    i += 1;
                    j += 1;
                }
            }
        }
        out.extend_from_slice(&a[i..]);
        out.extend_from_slice(&b[j..]);
        Atoms(out)
    }
}

impl std::ops::Index<&Term> for Atoms {
    type Output = BigRational;
    fn index(&self, k: &Term) -> &BigRational {
        self.get(k).expect("atom present")
    }
}

impl<K: Into<Atom> + std::borrow::Borrow<Term>> FromIterator<(K, BigRational)> for Atoms {
    fn from_iter<I: IntoIterator<Item = (K, BigRational)>>(iter: I) -> Atoms {
        let mut out = Atoms::new();
        for (k, e) in iter {
            out.insert(k, e);
        }
        out
    }
}

impl<K: Into<Atom> + std::borrow::Borrow<Term>, const N: usize> From<[(K, BigRational); N]>
    for Atoms
{
    fn from(items: [(K, BigRational); N]) -> Atoms {
        items.into_iter().collect()
    }
}

impl IntoIterator for Atoms {
    type Item = (Atom, BigRational);
    type IntoIter = std::vec::IntoIter<(Atom, BigRational)>;
    fn into_iter(self) -> Self::IntoIter {
        self.0.into_iter()
    }
}

impl<'a> IntoIterator for &'a Atoms {
    type Item = (&'a Term, &'a BigRational);
    type IntoIter = std::iter::Map<
        std::slice::Iter<'a, (Atom, BigRational)>,
        fn(&'a (Atom, BigRational)) -> (&'a Term, &'a BigRational),
    >;
    fn into_iter(self) -> Self::IntoIter {
        fn pair(p: &(Atom, BigRational)) -> (&Term, &BigRational) {
            (&*p.0, &p.1)
        }
        self.0.iter().map(pair)
    }
}

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
            atoms: Atoms::from([(Atom::new(a), exp)]),
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
        let mut factors = Vec::with_capacity(self.factors.len() + other.factors.len());
        factors.extend(self.factors.iter().cloned());
        factors.extend(other.factors.iter().cloned());
        Mono {
            coef: times(&self.coef, &other.coef),
            atoms: self.atoms.times(&other.atoms),
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
        for (a, e) in self.atoms.shared() {
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
                    *out.atoms.entry_or_zero(Term::Num(c)) += q;
                }
            }
        }
        Ok(out)
    }
}

/// `a · b`, without the greatest common divisors of the general product
/// when a factor is 1 or both are whole (the same reduced fraction).
fn times(a: &BigRational, b: &BigRational) -> BigRational {
    if a.is_one() {
        b.clone()
    } else if b.is_one() {
        a.clone()
    } else if a.is_integer() && b.is_integer() {
        BigRational::from_integer(a.numer() * b.numer())
    } else {
        a * b
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
