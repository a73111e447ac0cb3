//! Factored coefficients for display: a polynomial in one symbol with
//! rational roots is written as its content times powers of linear factors,
//! `- d^2 + 4 d - 4` as `- (d - 2)^2`, so that a coefficient reads
//! `(d - 2)^2/(d - 1)^2` instead of `(4 d - d^2 - 4)/(2 d - d^2 - 1)`.
//!
//! Printing only: the normal form that claims are decided on is not
//! touched, and the printed product reads back to the same normal form.
//! Roots are found by the rational root theorem (candidates ±p/q with p
//! dividing the constant and q the leading coefficient, after clearing
//! denominators; common practice), each divided out exactly; what has no
//! rational root stays as a sum.

use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use super::Term;

/// Highest degree factored.
const MAX_DEGREE: usize = 12;

/// Largest |coefficient| (after clearing denominators) whose divisors are
/// tried as roots.
const MAX_DIVISOR_SEARCH: i64 = 1_000_000;

/// One product term (a `Mul` or a single factor) with every polynomial
/// factor in one symbol that has rational roots factored, the numeric
/// contents multiplied into the leading coefficient and equal bases merged.
/// Returns the term unchanged when nothing factors.
pub fn factored(t: &Term) -> Term {
    let factors: Vec<Term> = match t {
        Term::Mul(fs) => fs.clone(),
        other => vec![other.clone()],
    };
    let mut changed = false;
    let mut coefficient = BigRational::one();
    let mut out: Vec<(Term, BigRational)> = Vec::new();
    for f in factors {
        let (base, exp) = match &f {
            Term::Pow(b, e) => match &**e {
                Term::Num(q) if q.is_integer() && !q.is_zero() => ((**b).clone(), q.clone()),
                _ => (f.clone(), BigRational::one()),
            },
            other => (other.clone(), BigRational::one()),
        };
        if let Term::Num(c) = &base {
            if exp.is_one() {
                coefficient *= c;
                continue;
            }
        }
        match factor_sum(&base) {
            Some((content, linear)) => {
                changed = true;
                let Some(e) = exp.to_integer().to_i32() else {
                    out.push((base, exp));
                    continue;
                };
                coefficient *= pow(&content, e);
                for (l, m) in linear {
                    push(
                        &mut out,
                        l,
                        exp.clone() * BigRational::from_integer(m.into()),
                    );
                }
            }
            None => match descending(&base).zip(exp.to_integer().to_i32()) {
                // `d^2 - 3 d + 1`, not `- (3 d - d^2 - 1)`: highest power
                // first, with a positive leading coefficient.
                Some(((negative, ordered), e)) if ordered != base => {
                    changed = true;
                    if negative && e % 2 != 0 {
                        coefficient = -coefficient;
                    }
                    match fraction_content(&ordered) {
                        Some((content, whole)) if e > 0 => {
                            coefficient *= pow(&content, e);
                            push(&mut out, whole, exp);
                        }
                        _ => push(&mut out, ordered, exp),
                    }
                }
                _ => match fraction_content(&base).zip(exp.to_integer().to_i32()) {
                    // `(2 g + 3)/2`, not `(g + 3/2)`: fractions come out of a sum.
                    Some(((content, whole), e)) if e > 0 => {
                        changed = true;
                        coefficient *= pow(&content, e);
                        push(&mut out, whole, exp);
                    }
                    _ => push(&mut out, base, exp),
                },
            },
        }
    }
    if !changed {
        return t.clone();
    }
    out.retain(|(_, e)| !e.is_zero());
    let mut fs: Vec<Term> = Vec::new();
    if !coefficient.is_one() || out.is_empty() {
        fs.push(Term::Num(coefficient));
    }
    for (b, e) in out {
        fs.push(if e.is_one() {
            b
        } else {
            Term::Pow(Box::new(b), Box::new(Term::Num(e)))
        });
    }
    match fs.len() {
        1 => fs.pop().unwrap_or_else(Term::one),
        _ => Term::Mul(fs),
    }
}

/// A sum with a fractional coefficient as 1/L times the sum with whole
/// coefficients, L the least common multiple of the denominators:
/// `g + 3/2` = (1/2)(2 g + 3). `None` when every coefficient is whole.
fn fraction_content(t: &Term) -> Option<(BigRational, Term)> {
    let Term::Add(terms) = t else {
        return None;
    };
    // Only coefficients such as `g + 3/2` or `d^2/4 - 1`: a long sum of
    // functions reads better with its fractions where they are.
    if !terms.iter().all(scalar_monomial) {
        return None;
    }
    let coefficient = |t: &Term| match t {
        Term::Num(c) => c.clone(),
        Term::Mul(fs) => match fs.first() {
            Some(Term::Num(c)) => c.clone(),
            _ => BigRational::one(),
        },
        _ => BigRational::one(),
    };
    let lcm = terms
        .iter()
        .fold(BigInt::one(), |acc, t| acc.lcm(coefficient(t).denom()));
    if lcm.is_one() {
        return None;
    }
    let scale = BigRational::from_integer(lcm);
    let scaled = terms
        .iter()
        .map(|t| {
            let c = coefficient(t) * &scale;
            let rest: Vec<Term> = match t {
                Term::Num(_) => vec![],
                Term::Mul(fs) if matches!(fs.first(), Some(Term::Num(_))) => fs[1..].to_vec(),
                Term::Mul(fs) => fs.clone(),
                other => vec![other.clone()],
            };
            let mut fs = Vec::new();
            if !c.is_one() || rest.is_empty() {
                fs.push(Term::Num(c));
            }
            fs.extend(rest);
            match fs.len() {
                1 => fs.pop().unwrap_or_else(Term::one),
                _ => Term::Mul(fs),
            }
        })
        .collect();
    Some((scale.recip(), Term::Add(scaled)))
}

/// An exponent as a rational multiple of a symbolic rest: `2 Delta` is
/// (2, Delta), `3` is (3, none).
fn scaled(e: &Term) -> (BigRational, Option<Term>) {
    match e {
        Term::Num(c) => (c.clone(), None),
        Term::Mul(fs) => match fs.split_first() {
            Some((Term::Num(c), rest)) => (
                c.clone(),
                Some(match rest {
                    [one] => one.clone(),
                    _ => Term::Mul(rest.to_vec()),
                }),
            ),
            _ => (BigRational::one(), Some(e.clone())),
        },
        other => (BigRational::one(), Some(other.clone())),
    }
}

fn unscaled(c: BigRational, rest: Option<Term>) -> Term {
    match rest {
        None => Term::Num(c),
        Some(r) if c.is_one() => r,
        Some(Term::Mul(mut fs)) => {
            fs.insert(0, Term::Num(c));
            Term::Mul(fs)
        }
        Some(r) => Term::Mul(vec![Term::Num(c), r]),
    }
}

/// The normal form of ξ(p, q) = |p - q|²/(4 p[n] q[n]), which
/// [`cross_ratio_points`] recognises and the printers write `xi(p, q)`.
fn cross_ratio_term(p: &super::Point, q: &super::Point) -> Term {
    let height = |a: &super::Point| {
        Term::Pow(
            Box::new(Term::Comp(a.clone(), super::Index::N)),
            Box::new(Term::int(-1)),
        )
    };
    Term::Mul(vec![
        Term::Num(BigRational::new(1.into(), 4.into())),
        Term::Pow(
            Box::new(Term::Dist(p.clone(), q.clone())),
            Box::new(Term::int(2)),
        ),
        height(p),
        height(q),
    ])
}

/// A product with the cross-ratio of each written pair taken back out of
/// its expansion, for display: |p - q|^(2a) p[n]^(-a) q[n]^(-a) (1/4)^a is
/// printed `xi(p, q)^(a)`, and with a number a the heights may keep a
/// remainder of the same sign (`|p - q|^2/(4 p[n]^2 q[n])` is
/// `xi(p, q)/p[n]`). The result reads back to the same normal form.
pub fn with_cross_ratios(
    t: &Term,
    pairs: &std::collections::BTreeSet<(super::Point, super::Point)>,
) -> Term {
    if pairs.is_empty() {
        return t.clone();
    }
    let mut fs: Vec<Term> = match t {
        Term::Mul(fs) => fs.clone(),
        _ => return t.clone(),
    };
    let mut changed = false;
    for (p, q) in pairs {
        if let Some(next) = take_cross_ratio(&fs, p, q) {
            fs = next;
            changed = true;
        }
    }
    if changed {
        Term::Mul(fs)
    } else {
        t.clone()
    }
}

/// One pair's ξ out of the factors, or `None` when it does not fit.
fn take_cross_ratio(fs: &[Term], p: &super::Point, q: &super::Point) -> Option<Vec<Term>> {
    let position = |want: &dyn Fn(&Term) -> bool| {
        fs.iter().position(|f| match f {
            Term::Pow(b, _) => want(b),
            other => want(other),
        })
    };
    let exponent = |f: &Term| match f {
        Term::Pow(_, e) => (**e).clone(),
        _ => Term::one(),
    };
    let dist = position(&|b| matches!(b, Term::Dist(a, c) if a == p && c == q))?;
    let yp = position(&|b| matches!(b, Term::Comp(a, super::Index::N) if a == p))?;
    let yq = position(&|b| matches!(b, Term::Comp(a, super::Index::N) if a == q))?;
    let (c, rest) = scaled(&exponent(&fs[dist]));
    let a = (c / BigRational::from_integer(2.into()), rest);
    let (cp, rp) = scaled(&exponent(&fs[yp]));
    let (cq, rq) = scaled(&exponent(&fs[yq]));
    let mut out: Vec<Term> = Vec::new();
    let mut coefficient: Option<BigRational> = None;
    let mut heights: Vec<(usize, BigRational)> = Vec::new();
    match &a.1 {
        None => {
            // A number: the heights keep what is left, of the same sign.
            let k = &a.0;
            if !(k * BigRational::from_integer(2.into())).is_integer() {
                return None;
            }
            for (i, (ci, ri)) in [(yp, (&cp, &rp)), (yq, (&cq, &rq))] {
                let left = ci + k;
                if ri.is_some() || (!left.is_zero() && left.is_positive() == k.is_positive()) {
                    return None;
                }
                heights.push((i, left));
            }
            // 4^a = 2^(2a), a whole power of two.
            let two = BigRational::from_integer(2.into());
            let e = (k * &two).to_integer().to_i32()?;
            coefficient = Some(pow(&two, e));
        }
        Some(r) => {
            // A symbolic power: the heights carry exactly -a, and a factor
            // (1/4)^a (or 4^(-a), 2^(-2a), (1/2)^(2a)) is there.
            let minus = (-a.0.clone(), Some(r.clone()));
            if (cp.clone(), rp.clone()) != minus || (cq.clone(), rq.clone()) != minus {
                return None;
            }
            heights.push((yp, BigRational::zero()));
            heights.push((yq, BigRational::zero()));
            let four = fs.iter().position(|f| match f {
                Term::Pow(b, e) => match &**b {
                    Term::Num(base) => {
                        let (ce, re) = scaled(e);
                        let want = |m: i64, base_num: i64, base_den: i64| {
                            *base == BigRational::new(base_num.into(), base_den.into())
                                && re.as_ref() == Some(r)
                                && ce == &a.0 * BigRational::from_integer(m.into())
                        };
                        want(1, 1, 4) || want(-1, 4, 1) || want(-2, 2, 1) || want(2, 1, 2)
                    }
                    _ => false,
                },
                _ => false,
            })?;
            heights.push((four, BigRational::zero()));
        }
    }
    let xi = cross_ratio_term(p, q);
    let power = unscaled(a.0.clone(), a.1.clone());
    let xi_power = if matches!(&power, Term::Num(c) if c.is_one()) {
        xi
    } else {
        Term::Pow(Box::new(xi), Box::new(power))
    };
    let mut placed = false;
    for (i, f) in fs.iter().enumerate() {
        if i == dist {
            continue;
        }
        if let Some((_, left)) = heights.iter().find(|(j, _)| *j == i) {
            if !left.is_zero() {
                let base = match f {
                    Term::Pow(b, _) => (**b).clone(),
                    other => other.clone(),
                };
                out.push(if left.is_one() {
                    base
                } else {
                    Term::Pow(Box::new(base), Box::new(Term::Num(left.clone())))
                });
            }
            continue;
        }
        if let (Some(c), Term::Num(n)) = (&coefficient, f) {
            let value = n * c;
            if !value.is_one() {
                out.push(Term::Num(value));
            }
            coefficient = None;
            continue;
        }
        if !placed && !matches!(f, Term::Num(_)) {
            out.push(xi_power.clone());
            placed = true;
        }
        out.push(f.clone());
    }
    if let Some(c) = coefficient {
        if !c.is_one() {
            out.insert(0, Term::Num(c));
        }
    }
    if !placed {
        out.push(xi_power);
    }
    Some(out)
}

/// A number times powers of symbols.
fn scalar_monomial(t: &Term) -> bool {
    match t {
        Term::Num(_) | Term::Sym(_) => true,
        Term::Pow(b, e) => matches!((&**b, &**e), (Term::Sym(_), Term::Num(_))),
        Term::Mul(fs) => fs.iter().all(scalar_monomial),
        _ => false,
    }
}

/// The two points p, q when `t` is the normal form of the cross-ratio
/// ξ = |p - q|²/(4 y_p y_q), so that a function's argument prints as
/// `xi(p, q)` again instead of its expansion.
pub fn cross_ratio_points(t: &Term) -> Option<(&super::Point, &super::Point)> {
    let Term::Mul(fs) = t else {
        return None;
    };
    if fs.len() != 4 {
        return None;
    }
    let quarter = BigRational::new(1.into(), 4.into());
    let mut dist = None;
    let mut heights = Vec::new();
    let mut coefficient = false;
    for f in fs {
        match f {
            Term::Num(c) if *c == quarter => coefficient = true,
            Term::Pow(b, e) => match (&**b, &**e) {
                (Term::Dist(p, q), Term::Num(k)) if *k == BigRational::from_integer(2.into()) => {
                    dist = Some((p, q))
                }
                (Term::Comp(p, super::Index::N), Term::Num(k)) if *k == -BigRational::one() => {
                    heights.push(p)
                }
                _ => return None,
            },
            _ => return None,
        }
    }
    let (p, q) = dist?;
    let bulk = |a: &super::Point| !a.par && !a.is_origin();
    let matches = heights.len() == 2
        && coefficient
        && bulk(p)
        && bulk(q)
        && ((heights[0] == p && heights[1] == q) || (heights[0] == q && heights[1] == p));
    matches.then_some((p, q))
}

/// The bulk point x and boundary points s1, s2 when `t` is the normal form
/// of the bulk–boundary–boundary cross-ratio χ = y² s12²/(|x - s1|²
/// |x - s2|²), so that a function's argument prints as `chi(x, s1, s2)`
/// again (s1 before s2 as in the distance |s1 - s2|).
pub fn chi_points(t: &Term) -> Option<(&super::Point, &super::Point, &super::Point)> {
    let Term::Mul(fs) = t else {
        return None;
    };
    if fs.len() != 4 {
        return None;
    }
    let two = BigRational::from_integer(2.into());
    let mut height = None;
    let mut top = None;
    let mut below = Vec::new();
    for f in fs {
        let Term::Pow(b, e) = f else {
            return None;
        };
        match (&**b, &**e) {
            (Term::Comp(p, super::Index::N), Term::Num(k)) if *k == two => height = Some(p),
            (Term::Dist(p, q), Term::Num(k)) if *k == two => top = Some((p, q)),
            (Term::Dist(p, q), Term::Num(k)) if *k == -two.clone() => below.push((p, q)),
            _ => return None,
        }
    }
    let (x, (s1, s2)) = (height?, top?);
    let other = |a: &super::Point, b: &super::Point| {
        below
            .iter()
            .any(|(p, q)| (*p == a && *q == b) || (*p == b && *q == a))
    };
    let distinct = x != s1 && x != s2 && s1 != s2;
    (distinct && below.len() == 2 && other(x, s1) && other(x, s2)).then_some((x, s1, s2))
}

/// True for a sum that is a polynomial in one symbol: its powers read back
/// as written (`/(d - 1)^2`), unlike sums of coordinates, whose powers the
/// normaliser expands.
pub fn is_univariate(t: &Term) -> bool {
    polynomial(t).is_some()
}

/// The one symbol of a sum that is a polynomial in one symbol.
pub fn univariate_symbol(t: &Term) -> Option<String> {
    polynomial(t).map(|(s, _)| s)
}

/// Adds `base^exp` to a product, merging with an equal base.
fn push(out: &mut Vec<(Term, BigRational)>, base: Term, exp: BigRational) {
    match out.iter_mut().find(|(b, _)| *b == base) {
        Some((_, e)) => *e += exp,
        None => out.push((base, exp)),
    }
}

fn pow(c: &BigRational, e: i32) -> BigRational {
    let mut r = BigRational::one();
    for _ in 0..e.unsigned_abs() {
        r *= c;
    }
    if e < 0 {
        r.recip()
    } else {
        r
    }
}

/// A sum that is a polynomial in one symbol with at least one rational root
/// (and degree at least 2, or a content other than ±1): its content and its
/// factors with multiplicities, linear ones monic (`d - 2`), the rest as a
/// sum with a positive leading coefficient.
pub(crate) fn factor_sum(t: &Term) -> Option<(BigRational, Vec<(Term, u32)>)> {
    let (symbol, mut coefs) = polynomial(t)?;
    let degree = coefs.len() - 1;
    // A linear sum is as short as it gets: `2 d - 3`, not `2 (d - 3/2)`.
    if !(2..=MAX_DEGREE).contains(&degree) {
        return None;
    }
    let mut factors: Vec<(BigRational, u32)> = Vec::new();
    // Roots at zero: powers of the symbol.
    let mut zeros = 0u32;
    while coefs.len() > 1 && coefs[0].is_zero() {
        coefs.remove(0);
        zeros += 1;
    }
    loop {
        if coefs.len() < 2 {
            break;
        }
        let Some(root) = rational_root(&coefs) else {
            break;
        };
        coefs = deflate(&coefs, &root);
        match factors.iter_mut().find(|(r, _)| *r == root) {
            Some((_, m)) => *m += 1,
            None => factors.push((root, 1)),
        }
    }
    let leading = coefs.last()?.clone();
    let linear_count: u32 = factors.iter().map(|(_, m)| m).sum::<u32>() + zeros;
    // Nothing gained: a monic linear polynomial, or no root at all.
    if factors.is_empty() && zeros == 0 {
        return None;
    }
    if linear_count == 1 && coefs.len() == 1 && leading.abs().is_one() {
        return None;
    }
    let sym = Term::Sym(symbol);
    let mut out: Vec<(Term, u32)> = Vec::new();
    if zeros > 0 {
        out.push((sym.clone(), zeros));
    }
    let mut leading = leading;
    for (root, m) in factors {
        // The root p/q as the integer factor q s - p: `2 d - 3`.
        let q = BigRational::from_integer(root.denom().clone());
        let p = BigRational::from_integer(root.numer().clone());
        let linear = if q.is_one() {
            Term::Add(vec![sym.clone(), Term::Num(-p)])
        } else {
            Term::Add(vec![
                Term::Mul(vec![Term::Num(q.clone()), sym.clone()]),
                Term::Num(-p),
            ])
        };
        for _ in 0..m {
            leading /= &q;
        }
        out.push((linear, m));
    }
    if coefs.len() > 1 {
        // The part without rational roots, monic up to its content.
        let top = coefs[coefs.len() - 1].clone();
        let rest: Vec<BigRational> = coefs.iter().map(|c| c / &top).collect();
        out.push((from_coefficients(&sym, &rest), 1));
    }
    Some((leading, out))
}

/// A polynomial in one symbol written highest power first with a positive
/// leading coefficient, and whether that took a sign out.
fn descending(t: &Term) -> Option<(bool, Term)> {
    let (symbol, mut coefs) = polynomial(t)?;
    if coefs.len() < 2 {
        return None;
    }
    let negative = coefs.last()?.is_negative();
    if negative {
        coefs.iter_mut().for_each(|c| *c = -c.clone());
    }
    Some((negative, from_coefficients(&Term::Sym(symbol), &coefs)))
}

/// The symbol and coefficients (constant first) of a sum that is a
/// polynomial in exactly one symbol.
fn polynomial(t: &Term) -> Option<(String, Vec<BigRational>)> {
    let Term::Add(terms) = t else {
        return None;
    };
    let mut symbol: Option<String> = None;
    let mut coefs: Vec<BigRational> = Vec::new();
    for term in terms {
        let (c, s, k) = monomial(term)?;
        if let Some(s) = s {
            match &symbol {
                Some(name) if *name != s => return None,
                Some(_) => {}
                None => symbol = Some(s),
            }
        }
        if k > MAX_DEGREE {
            return None;
        }
        if coefs.len() <= k {
            coefs.resize(k + 1, BigRational::zero());
        }
        coefs[k] += c;
    }
    let symbol = symbol?;
    while coefs.len() > 1 && coefs.last().is_some_and(|c| c.is_zero()) {
        coefs.pop();
    }
    Some((symbol, coefs))
}

/// `c s^k` as (c, s, k); a number as (c, None, 0).
fn monomial(t: &Term) -> Option<(BigRational, Option<String>, usize)> {
    match t {
        Term::Num(c) => Some((c.clone(), None, 0)),
        Term::Sym(s) => Some((BigRational::one(), Some(s.clone()), 1)),
        Term::Pow(b, e) => match (&**b, &**e) {
            (Term::Sym(s), Term::Num(k)) if k.is_integer() && k.is_positive() => Some((
                BigRational::one(),
                Some(s.clone()),
                k.to_integer().to_usize()?,
            )),
            _ => None,
        },
        Term::Mul(fs) => {
            let mut c = BigRational::one();
            let mut sym: Option<(String, usize)> = None;
            for f in fs {
                match monomial(f)? {
                    (k, None, 0) => c *= k,
                    (k, Some(s), p) if sym.is_none() => {
                        c *= k;
                        sym = Some((s, p));
                    }
                    _ => return None,
                }
            }
            match sym {
                Some((s, p)) => Some((c, Some(s), p)),
                None => Some((c, None, 0)),
            }
        }
        _ => None,
    }
}

/// A rational root of the polynomial (constant term first, nonzero), if
/// one exists among the rational-root-theorem candidates.
fn rational_root(coefs: &[BigRational]) -> Option<BigRational> {
    // Clear denominators.
    let lcm = coefs
        .iter()
        .fold(BigInt::one(), |acc, c| acc.lcm(c.denom()));
    let ints: Vec<BigInt> = coefs.iter().map(|c| (c * &lcm).to_integer()).collect();
    let a0 = ints.first()?.abs().to_i64()?;
    let an = ints.last()?.abs().to_i64()?;
    if a0 == 0 || a0 > MAX_DIVISOR_SEARCH || an > MAX_DIVISOR_SEARCH {
        return None;
    }
    for p in divisors(a0) {
        for q in divisors(an) {
            for sign in [1i64, -1] {
                let r = BigRational::new(BigInt::from(sign * p), BigInt::from(q));
                if evaluate(coefs, &r).is_zero() {
                    return Some(r);
                }
            }
        }
    }
    None
}

/// The positive divisors of n ≥ 1, by trial division up to √n.
fn divisors(n: i64) -> Vec<i64> {
    let mut small = Vec::new();
    let mut large = Vec::new();
    let mut k = 1i64;
    while k * k <= n {
        if n % k == 0 {
            small.push(k);
            if k * k != n {
                large.push(n / k);
            }
        }
        k += 1;
    }
    small.extend(large.into_iter().rev());
    small
}

fn evaluate(coefs: &[BigRational], x: &BigRational) -> BigRational {
    coefs
        .iter()
        .rev()
        .fold(BigRational::zero(), |acc, c| acc * x + c)
}

/// The quotient by (s - root), by synthetic division (exact: root is a
/// root).
fn deflate(coefs: &[BigRational], root: &BigRational) -> Vec<BigRational> {
    let n = coefs.len() - 1;
    let mut quotient = vec![BigRational::zero(); n];
    let mut carry = BigRational::zero();
    for k in (1..=n).rev() {
        carry = &coefs[k] + carry * root;
        quotient[k - 1] = carry.clone();
    }
    // carry * root + coefs[0] is the remainder, zero by construction.
    quotient
}

/// The sum c0 + c1 s + … with the highest power first.
fn from_coefficients(sym: &Term, coefs: &[BigRational]) -> Term {
    let mut terms = Vec::new();
    for (k, c) in coefs.iter().enumerate().rev() {
        if c.is_zero() {
            continue;
        }
        let power = match k {
            0 => None,
            1 => Some(sym.clone()),
            _ => Some(Term::Pow(
                Box::new(sym.clone()),
                Box::new(Term::Num(BigRational::from_integer(k.into()))),
            )),
        };
        terms.push(match (power, c.is_one()) {
            (None, _) => Term::Num(c.clone()),
            (Some(p), true) => p,
            (Some(p), false) => Term::Mul(vec![Term::Num(c.clone()), p]),
        });
    }
    match terms.len() {
        1 => terms.pop().unwrap_or_else(Term::zero),
        _ => Term::Add(terms),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn int(k: i64) -> Term {
        Term::int(k)
    }
    fn d() -> Term {
        Term::Sym("d".into())
    }
    fn d2() -> Term {
        Term::Pow(Box::new(d()), Box::new(int(2)))
    }
    fn times(c: i64, t: Term) -> Term {
        Term::Mul(vec![int(c), t])
    }

    #[test]
    fn perfect_squares_and_their_quotient() {
        // (4 d - d^2 - 4)/(2 d - d^2 - 1) = (d - 2)^2/(d - 1)^2.
        let num = Term::Add(vec![times(4, d()), times(-1, d2()), int(-4)]);
        let den = Term::Add(vec![times(2, d()), times(-1, d2()), int(-1)]);
        let t = Term::Mul(vec![num, Term::Pow(Box::new(den), Box::new(int(-1)))]);
        let f = factored(&t);
        let dm2 = Term::Add(vec![d(), int(-2)]);
        let dm1 = Term::Add(vec![d(), int(-1)]);
        assert_eq!(
            f,
            Term::Mul(vec![
                Term::Pow(Box::new(dm2), Box::new(int(2))),
                Term::Pow(Box::new(dm1), Box::new(int(-2))),
            ])
        );
    }

    #[test]
    fn content_and_irreducible_rest() {
        // 2 d^3 - 2 d = 2 d (d - 1)(d + 1); d^2 + 1 has no rational root.
        let t = Term::Add(vec![
            times(2, Term::Pow(Box::new(d()), Box::new(int(3)))),
            times(-2, d()),
        ]);
        assert_eq!(
            factored(&t),
            Term::Mul(vec![
                int(2),
                d(),
                Term::Add(vec![d(), int(-1)]),
                Term::Add(vec![d(), int(1)]),
            ])
        );
        let irreducible = Term::Add(vec![d2(), int(1)]);
        assert_eq!(factored(&irreducible), irreducible);
        // A monic linear sum is left as it is.
        let linear = Term::Add(vec![d(), int(2)]);
        assert_eq!(factored(&linear), linear);
    }

    #[test]
    fn factored_value_is_the_same() {
        // Evaluate both forms at d = 7/3: the factorisation is exact.
        let num = Term::Add(vec![times(6, d2()), times(-5, d()), int(1)]);
        let f = factored(&num);
        let value = |t: &Term| -> f64 {
            fn ev(t: &Term) -> f64 {
                match t {
                    Term::Num(c) => c.to_f64().unwrap_or(f64::NAN),
                    Term::Sym(_) => 7.0 / 3.0,
                    Term::Add(ts) => ts.iter().map(ev).sum(),
                    Term::Mul(ts) => ts.iter().map(ev).product(),
                    Term::Pow(b, e) => ev(b).powf(ev(e)),
                    _ => f64::NAN,
                }
            }
            ev(t)
        };
        assert!((value(&num) - value(&f)).abs() < 1e-12);
        assert_ne!(f, num);
    }
}
