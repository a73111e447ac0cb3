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
//!
//! The pairings are enumerated depth first, a branch ending at a pair of
//! distinct fields, within the contraction budget of
//! [`crate::budget::MAX_WICK`]: a correlator with too many pairings is a
//! limit error, not an exhausted memory.

use super::{add, dist_pow, mul, node_count, normal_coord, pow, rational, unknown, Model};
use crate::budget::Pairings;
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
        // Sum over perfect matchings, enumerated depth first; a pair of
        // distinct fields ends its branch, and each pair's propagator is
        // built once.
        let mut terms = Vec::new();
        if ops.len() % 2 == 0 {
            let mut walk = Pairing {
                model: self,
                ctx,
                ops,
                pairs: vec![None; ops.len() * ops.len()],
                used: vec![false; ops.len()],
                factors: Vec::with_capacity(ops.len() / 2),
                budget: Pairings::default(),
            };
            walk.next(&mut terms)?;
        }
        Ok(if terms.is_empty() {
            Term::zero()
        } else {
            add(terms)
        })
    }
}

/// The depth-first walk over the pairings of one correlator.
struct Pairing<'a> {
    model: &'a Gff,
    ctx: &'a Context,
    ops: &'a [Op],
    /// The propagator of insertions (i, j), i < j, at `i * n + j`, once built.
    pairs: Vec<Option<Term>>,
    used: Vec<bool>,
    /// The propagators of the pairs placed so far.
    factors: Vec<(usize, usize)>,
    budget: Pairings,
}

impl Pairing<'_> {
    /// Pairs the first free insertion with each later free one, in order,
    /// and pushes one product per complete pairing.
    fn next(&mut self, terms: &mut Vec<Term>) -> Result<()> {
        let n = self.ops.len();
        let Some(first) = self.used.iter().position(|u| !u) else {
            let n = self.ops.len();
            let factors = self
                .factors
                .iter()
                .map(|&(i, j)| self.pairs[i * n + j].clone().unwrap_or_else(Term::zero))
                .collect();
            let product = mul(factors);
            self.budget.build(node_count(&product))?;
            terms.push(product);
            return Ok(());
        };
        self.used[first] = true;
        for partner in first + 1..n {
            if self.used[partner] {
                continue;
            }
            self.budget.place()?;
            if self.ops[first].name != self.ops[partner].name {
                continue;
            }
            if self.pairs[first * n + partner].is_none() {
                let t = self
                    .model
                    .pair(self.ctx, &self.ops[first], &self.ops[partner])?;
                self.pairs[first * n + partner] = Some(t);
            }
            self.used[partner] = true;
            self.factors.push((first, partner));
            let done = self.next(terms);
            self.factors.pop();
            self.used[partner] = false;
            done?;
        }
        self.used[first] = false;
        Ok(())
    }
}
