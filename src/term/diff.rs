//! Derivatives of a term with respect to one scalar symbol, and the
//! substitution of a term for a symbol: what a function defined in a file
//! (`let f(t) = …`, and the built-in blocks) needs so that `f''(ξ)` is the
//! second derivative of its expression in t, taken at ξ.
//!
//! The rules are those of calculus (common practice): linearity, the
//! Leibniz rule, (b^e)' = e b^(e-1) b' for an exponent free of t, and the
//! chain rule through functions, F(u_1, …)' = Σ_k ∂_k F · u_k', with
//! ₂F₁(a, b; c; z)' = ₂F₁'(a, b; c; z) z'. Derivatives in points (∂[i](x))
//! commute with it. Points, coordinates, correlators and δ-functions do not
//! depend on t. The result is not simplified: normalisation does that.

use super::{Integral, Region, Term};

/// Why a term has no derivative in t that this module can write.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct NotDifferentiable(pub &'static str);

/// d/dt of `t`, with t the symbol named `var`.
pub fn derivative(t: &Term, var: &str) -> Result<Term, NotDifferentiable> {
    if !mentions_symbol(t, var) {
        return Ok(Term::zero());
    }
    Ok(match t {
        Term::Sym(_) => Term::one(),
        Term::Add(ts) => Term::Add(
            ts.iter()
                .map(|s| derivative(s, var))
                .collect::<Result<_, _>>()?,
        ),
        Term::Mul(ts) => {
            let mut parts = Vec::new();
            for (k, f) in ts.iter().enumerate() {
                if !mentions_symbol(f, var) {
                    continue;
                }
                let mut product = ts.clone();
                product[k] = derivative(f, var)?;
                parts.push(Term::Mul(product));
            }
            Term::Add(parts)
        }
        Term::Pow(base, e) => {
            if mentions_symbol(e, var) {
                return Err(NotDifferentiable(
                    "a power whose exponent depends on the variable (its derivative needs a logarithm)",
                ));
            }
            Term::Mul(vec![
                (**e).clone(),
                Term::Pow(
                    base.clone(),
                    Box::new(Term::Add(vec![(**e).clone(), Term::int(-1)])),
                ),
                derivative(base, var)?,
            ])
        }
        Term::Fun(name, orders, args) => {
            let hypergeometric = t.as_hyp2f1().is_some();
            let mut parts = Vec::new();
            for (k, arg) in args.iter().enumerate() {
                if !mentions_symbol(arg, var) {
                    continue;
                }
                if hypergeometric && k < 3 {
                    return Err(NotDifferentiable(
                        "₂F₁ whose parameters a, b, c depend on the variable (only z may)",
                    ));
                }
                let mut raised = orders.clone();
                raised[k] += 1;
                parts.push(Term::Mul(vec![
                    Term::Fun(name.clone(), raised, args.clone()),
                    derivative(arg, var)?,
                ]));
            }
            Term::Add(parts)
        }
        Term::Der(i, p, body) => Term::Der(i.clone(), p.clone(), Box::new(derivative(body, var)?)),
        Term::Integral(integral) => {
            if let Region::Ball(_, r) = &integral.region {
                if mentions_symbol(r, var) {
                    return Err(NotDifferentiable(
                        "an integral over a ball whose radius depends on the variable",
                    ));
                }
            }
            Term::Integral(Box::new(Integral {
                body: derivative(&integral.body, var)?,
                ..(**integral).clone()
            }))
        }
        // Nothing else can hold a symbol.
        _ => Term::zero(),
    })
}

/// True if the symbol `var` occurs in `t`.
pub fn mentions_symbol(t: &Term, var: &str) -> bool {
    match t {
        Term::Sym(s) => s == var,
        Term::Pow(a, b) => mentions_symbol(a, var) || mentions_symbol(b, var),
        Term::Mul(ts) | Term::Add(ts) | Term::Fun(_, _, ts) => {
            ts.iter().any(|s| mentions_symbol(s, var))
        }
        Term::Der(_, _, body) => mentions_symbol(body, var),
        Term::Integral(i) => {
            mentions_symbol(&i.body, var)
                || matches!(&i.region, Region::Ball(_, r) if mentions_symbol(r, var))
        }
        _ => false,
    }
}

/// `t` with every occurrence of the symbol `var` replaced by `value`.
pub fn substitute(t: &Term, var: &str, value: &Term) -> Term {
    if !mentions_symbol(t, var) {
        return t.clone();
    }
    let sub = |s: &Term| substitute(s, var, value);
    match t {
        Term::Sym(_) => value.clone(),
        Term::Pow(a, b) => Term::Pow(Box::new(sub(a)), Box::new(sub(b))),
        Term::Mul(ts) => Term::Mul(ts.iter().map(sub).collect()),
        Term::Add(ts) => Term::Add(ts.iter().map(sub).collect()),
        Term::Fun(f, k, args) => Term::Fun(f.clone(), k.clone(), args.iter().map(sub).collect()),
        Term::Der(i, p, body) => Term::Der(i.clone(), p.clone(), Box::new(sub(body))),
        Term::Integral(i) => {
            let mut i = (**i).clone();
            i.body = sub(&i.body);
            if let Region::Ball(c, r) = &i.region {
                i.region = Region::Ball(c.clone(), sub(r));
            }
            Term::Integral(Box::new(i))
        }
        other => other.clone(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sym(s: &str) -> Term {
        Term::Sym(s.into())
    }

    #[test]
    fn leibniz_and_powers() {
        // d/dt (t^3 a) = 3 t^(3 - 1) 1 a: the shape, before normalisation.
        let t = Term::Mul(vec![
            Term::Pow(Box::new(sym("t")), Box::new(Term::int(3))),
            sym("a"),
        ]);
        let d = derivative(&t, "t").unwrap();
        let Term::Add(parts) = d else { panic!() };
        assert_eq!(parts.len(), 1);
        assert!(mentions_symbol(&parts[0], "t"));
        assert!(!mentions_symbol(&parts[0], "b"));
    }

    #[test]
    fn exponents_in_the_variable_are_refused() {
        let t = Term::Pow(Box::new(sym("a")), Box::new(sym("t")));
        assert!(derivative(&t, "t").is_err());
    }

    #[test]
    fn hypergeometric_moves_with_z_only() {
        let f = Term::hyp2f1(0, sym("a"), sym("b"), sym("c"), sym("t"));
        let d = derivative(&f, "t").unwrap();
        let Term::Add(parts) = d else { panic!() };
        let Term::Mul(fs) = &parts[0] else { panic!() };
        assert_eq!(fs[0].as_hyp2f1().map(|(_, k)| k), Some(1));
        let g = Term::hyp2f1(0, sym("t"), sym("b"), sym("c"), sym("z"));
        assert!(derivative(&g, "t").is_err());
    }

    #[test]
    fn substitution_reaches_every_occurrence() {
        let f = Term::hyp2f1(2, sym("a"), sym("b"), sym("c"), sym("t"));
        let g = substitute(&f, "t", &Term::int(-1));
        assert!(!mentions_symbol(&g, "t"));
    }
}
