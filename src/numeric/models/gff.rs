//! Generalised free fields: every declared bulk scalar O of dimension Δ is
//! a Gaussian field with ⟨O(x) O(x')⟩ = C_O/|x - x'|^{2Δ}, and, next to a
//! wall, the image term ± C_O/|x - x̄'|^{2Δ} with |x - x̄'|² = |x - x'|² +
//! 4 y y' (+ for the Neumann-like, - for the Dirichlet-like choice; common
//! practice for generalised free fields with a boundary). Correlators of
//! several fields are sums over pairings (Wick contraction); distinct
//! fields do not contract. A self-contraction keeps only its image term
//! (normal ordering, as for the free scalar), so ⟨O(x) O(x)⟩ pairs at one
//! point give ±C_O/(2y)^{2Δ}. There is no local stress tensor: T and D are
//! refused.

use super::{add, dist_pow, mul, normal_coord, pow, rational, unknown, Model};
use crate::context::Context;
use crate::diagnostic::Result;
use crate::term::{Op, Term};

/// Generalised free fields, optionally with a wall.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Gff {
    /// `Some(+1)` Neumann-like, `Some(-1)` Dirichlet-like, `None` no wall.
    pub wall: Option<i64>,
}

impl Gff {
    pub fn new(wall: Option<i64>) -> Gff {
        Gff { wall }
    }

    /// The contraction of two insertions of the same field.
    fn pair(&self, ctx: &Context, a: &Op, b: &Op) -> Result<Term> {
        let dim = ctx.attribute(&a.name, "dim").cloned().ok_or_else(|| {
            unknown(
                "generalised free field",
                std::slice::from_ref(a),
                "an operator without a dimension",
            )
        })?;
        let norm = ctx
            .attribute(&a.name, "norm")
            .cloned()
            .unwrap_or_else(Term::one);
        let exponent = mul(vec![Term::int(-2), dim]);
        let mut parts = Vec::new();
        if a.point != b.point {
            parts.push(mul(vec![
                norm.clone(),
                dist_pow(&a.point, &b.point, exponent.clone()),
            ]));
        }
        if let Some(sign) = self.wall {
            let image = add(vec![
                dist_pow(&a.point, &b.point, Term::int(2)),
                mul(vec![
                    Term::int(4),
                    normal_coord(&a.point),
                    normal_coord(&b.point),
                ]),
            ]);
            parts.push(mul(vec![
                Term::int(sign),
                norm,
                pow(image, mul(vec![rational(1, 2), exponent])),
            ]));
        }
        Ok(add(parts))
    }
}

impl Model for Gff {
    fn describe(&self) -> String {
        match self.wall {
            None => "generalised free fields: ⟨O O⟩ = C/|x - x'|^(2Δ) (C from `norm`, default 1), Wick contraction".into(),
            Some(s) => format!(
                "generalised free fields with a wall, image sign {}: ⟨O O⟩ = C(|x - x'|^(-2Δ) {} |x - x̄'|^(-2Δ)), Wick contraction",
                if s > 0 { "+" } else { "-" },
                if s > 0 { "+" } else { "-" }
            ),
        }
    }

    fn correlator(&self, ctx: &Context, ops: &[Op]) -> Result<Term> {
        for op in ops {
            let decl = ctx.operator(&op.name);
            if decl.map_or(true, |d| d.boundary || d.rank > 0) {
                return Err(unknown(
                    "generalised free field",
                    ops,
                    format!(
                        "`{}` is not a bulk scalar; generalised free fields have no stress tensor",
                        op.name
                    ),
                ));
            }
        }
        if ops.is_empty() {
            return Ok(Term::one());
        }
        // Sum over perfect matchings.
        let mut terms = Vec::new();
        for pairing in pairings(ops.len()) {
            let mut factors = Vec::new();
            let mut vanishes = false;
            for (i, j) in pairing {
                if ops[i].name != ops[j].name {
                    vanishes = true;
                    break;
                }
                factors.push(self.pair(ctx, &ops[i], &ops[j])?);
            }
            if !vanishes {
                terms.push(mul(factors));
            }
        }
        Ok(if terms.is_empty() {
            Term::zero()
        } else {
            add(terms)
        })
    }
}

/// All perfect matchings of 0..n (none for odd n).
fn pairings(n: usize) -> Vec<Vec<(usize, usize)>> {
    fn go(rest: &[usize], acc: &mut Vec<(usize, usize)>, out: &mut Vec<Vec<(usize, usize)>>) {
        let Some((&first, tail)) = rest.split_first() else {
            out.push(acc.clone());
            return;
        };
        for k in 0..tail.len() {
            let mut remaining = tail.to_vec();
            let partner = remaining.remove(k);
            acc.push((first, partner));
            go(&remaining, acc, out);
            acc.pop();
        }
    }
    let mut out = Vec::new();
    if n % 2 == 0 {
        go(&(0..n).collect::<Vec<_>>(), &mut Vec::new(), &mut out);
    }
    out
}
