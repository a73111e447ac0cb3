//! Symbolic differentiation of one monomial: the Leibniz rule over its
//! scalar atoms and its factors.
//!
//! Explicit functions are differentiated here (common practice):
//!   ∂_i |p - q| = (p_i - q_i)/|p - q|,  ∂_i p_k = δ_ik,  ∂_i p_n = n_i,
//!   ∂_i F^{(k)}(u) = F^{(k+1)}(u) ∂_i u,  ∂_i a^E = E a^E a^{-1} ∂_i a,
//!   ∂_i F(u, v) = F_{,u}(u, v) ∂_i u + F_{,v}(u, v) ∂_i v (any number of
//!   arguments), ∂_i ₂F₁(a, b; c; z) = ₂F₁'(a, b; c; z) ∂_i z.
//! A point on the wall (a boundary point, or the projection x∥) moves only
//! along it: its gradients carry the projector δ_ik - n_i n_k.
//! These are pointwise derivatives; [`super::distribution`] adds the
//! δ-function terms of singular points.
//! Derivatives of δ-functions, correlators and integrals stay as ∂ factors.

use num_rational::BigRational;
use num_traits::One;

use super::Norm;
use super::{derivative, expand, Mono};
use crate::diagnostic::Result;
use crate::term::{Index, Point, Term};

/// ∂[i](p) of one monomial.
pub fn differentiate(ctx: &Norm, i: &Index, p: &Point, m: Mono) -> Result<Vec<Mono>> {
    let mut out = Vec::new();
    for (atom, exp) in &m.atoms {
        if !atom.mentions_point(p) {
            continue;
        }
        let mut rest = m.clone();
        // a^e → e a^(e-1) ∂a
        let lowered = exp - BigRational::one();
        if lowered == num_traits::Zero::zero() {
            rest.atoms.remove(atom);
        } else {
            rest.atoms.insert(atom.clone(), lowered);
        }
        rest.coef *= exp;
        for d in atom_derivative(ctx, i, p, atom)? {
            out.push(rest.mul(&d));
        }
    }
    for (k, f) in m.factors.iter().enumerate() {
        if !f.mentions_point(p) {
            continue;
        }
        let mut rest = m.clone();
        rest.factors.remove(k);
        match f {
            // ∂_i p_k = δ_ik; for a projection, δ_ik - n_i n_k.
            Term::Comp(q, index) => {
                for d in expand(
                    ctx,
                    &coordinate_gradient(i, q, index, ctx.is_boundary_point(q)),
                )? {
                    out.push(rest.mul(&d));
                }
            }
            _ => {
                let mut next = m.clone();
                next.factors[k] = derivative(i, p, f.clone());
                out.push(next);
            }
        }
    }
    Ok(out)
}

/// ∂_i of one scalar atom, as monomials.
fn atom_derivative(ctx: &Norm, i: &Index, p: &Point, atom: &Term) -> Result<Vec<Mono>> {
    let term = match atom {
        Term::Dist(a, b) => {
            // ∂_i |a - b| = ((∂_i a_k) - (∂_i b_k)) (a - b)_k / |a - b|,
            // written without a summation index for whole points.
            let mut parts = Vec::new();
            for (q, sign) in [(a, 1), (b, -1)] {
                if !q.depends_on(p) {
                    continue;
                }
                let difference = Term::Add(vec![
                    Term::Comp(a.clone(), i.clone()),
                    Term::Mul(vec![Term::int(-1), Term::Comp(b.clone(), i.clone())]),
                ]);
                let mut along = vec![Term::int(sign), difference];
                if ctx.is_boundary_point(q) {
                    // Only the parallel part moves: subtract n_i (a - b)_n.
                    let normal_part = Term::Mul(vec![
                        Term::Normal(i.clone()),
                        Term::Add(vec![
                            Term::Comp(a.clone(), Index::N),
                            Term::Mul(vec![Term::int(-1), Term::Comp(b.clone(), Index::N)]),
                        ]),
                    ]);
                    along = vec![
                        Term::int(sign),
                        Term::Add(vec![
                            along.pop().unwrap_or_else(Term::zero),
                            Term::Mul(vec![Term::int(-1), normal_part]),
                        ]),
                    ];
                }
                along.push(Term::Pow(Box::new(atom.clone()), Box::new(Term::int(-1))));
                parts.push(Term::Mul(along));
            }
            Term::Add(parts)
        }
        // ∂_i p_n = n_i.
        Term::Comp(q, Index::N) if !q.par => Term::Normal(i.clone()),
        // ∂_i F(u_1, …) = Σ_k ∂_k F(u_1, …) ∂_i u_k; ₂F₁ moves with its
        // argument z only, its parameters are free of points (lowering
        // makes sure of it).
        Term::Fun(name, orders, args) => {
            let hypergeometric = atom.as_hyp2f1().is_some();
            let mut parts = Vec::new();
            for (k, arg) in args.iter().enumerate() {
                if !arg.mentions_point(p) {
                    continue;
                }
                if hypergeometric && k < 3 {
                    return Err(crate::diagnostic::Error::new(
                        crate::diagnostic::ErrorKind::Unsupported,
                        "the parameters a, b, c of ₂F₁(a, b; c; z) cannot depend on a point: only z may",
                    ));
                }
                let mut raised = orders.clone();
                raised[k] += 1;
                parts.push(Term::Mul(vec![
                    Term::Fun(name.clone(), raised, args.clone()),
                    Term::Der(i.clone(), p.clone(), Box::new(arg.clone())),
                ]));
            }
            Term::Add(parts)
        }
        // ∂_i a^E = E a^E a^(-1) ∂_i a.
        Term::Pow(base, e) => Term::Mul(vec![
            (**e).clone(),
            atom.clone(),
            Term::Pow(base.clone(), Box::new(Term::int(-1))),
            Term::Der(i.clone(), p.clone(), base.clone()),
        ]),
        // A sum carrying a power: differentiate the sum.
        Term::Add(_) | Term::Mul(_) => Term::Der(i.clone(), p.clone(), Box::new(atom.clone())),
        _ => Term::zero(),
    };
    expand(ctx, &term)
}

/// ∂_i q_k for a point q that moves with the differentiated point; a
/// point on the wall moves only along it.
fn coordinate_gradient(i: &Index, _q: &Point, k: &Index, on_wall: bool) -> Term {
    let kron = Term::Kron(i.clone(), k.clone());
    if on_wall {
        Term::Add(vec![
            kron,
            Term::Mul(vec![
                Term::int(-1),
                Term::Normal(i.clone()),
                Term::Normal(k.clone()),
            ]),
        ])
    } else {
        kron
    }
}
