//! Numeric components in numeric statements: `x1[0]`, `T[0,1](x)`,
//! `∂[2](x1) <…>`, `a[1]`, `δ[0,1]`, `n[2]`.
//!
//! Components count from 0 to d - 1 (the labels `evaluate` prints), the
//! normal coordinate last. Before the summation convention is checked,
//! every numeric index k is replaced by a fresh summed index ι contracted
//! with the unit vector e_k: `x1[0]` becomes `x1[ι1] e#0[ι1]`. The unit
//! vectors are parameters whose values the numeric layer supplies, so the
//! rest of the pipeline (index checks, normal form, compiler) sees only
//! ordinary contractions. Symbolic statements (claims, `simplify`,
//! derivations) refuse numeric indices: there a free index says the same
//! for every component.

use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::ToPrimitive;

use super::Lowerer;
use crate::context::ParamDecl;
use crate::diagnostic::{ErrorKind, Result};
use crate::syntax::ast::{BinOp, Expr, ExprKind, Insertion, Name, RegionKind, Span};
use crate::term::Term;

/// The name of the unit vector e_k (not an identifier: a file cannot name it).
pub fn unit_vector(k: usize) -> String {
    format!("e#{k}")
}

/// `Some(k)` for a unit vector's name.
pub fn unit_vector_component(name: &str) -> Option<usize> {
    name.strip_prefix("e#")?.parse().ok()
}

/// True for an index written as a number.
pub(super) fn is_numeric(n: &Name) -> bool {
    !n.is_var && !n.text.is_empty() && n.text.bytes().all(|b| b.is_ascii_digit())
}

impl Lowerer {
    /// `e` with every numeric index replaced by a contraction with a unit
    /// vector (see the module documentation).
    pub(super) fn numeric_components(&mut self, e: &Expr) -> Result<Expr> {
        Ok(match &e.kind {
            ExprKind::Component { name, par, indices } => {
                let mut units = Vec::new();
                let indices = self.replace_indices(indices, &mut units)?;
                with_units(
                    Expr {
                        kind: ExprKind::Component {
                            name: name.clone(),
                            par: *par,
                            indices,
                        },
                        span: e.span,
                    },
                    units,
                )
            }
            ExprKind::Corr(insertions) => {
                let mut units = Vec::new();
                let mut out = Vec::with_capacity(insertions.len());
                for ins in insertions {
                    out.push(match ins {
                        Insertion::Op(op) => {
                            let mut op = op.clone();
                            op.indices = self.replace_indices(&op.indices, &mut units)?;
                            Insertion::Op(op)
                        }
                        other => other.clone(),
                    });
                }
                with_units(
                    Expr {
                        kind: ExprKind::Corr(out),
                        span: e.span,
                    },
                    units,
                )
            }
            ExprKind::Deriv { index, point, body } => {
                let body = Box::new(self.numeric_components(body)?);
                let mut units = Vec::new();
                let index = self.replace_indices(std::slice::from_ref(index), &mut units)?;
                with_units(
                    Expr {
                        kind: ExprKind::Deriv {
                            index: index[0].clone(),
                            point: point.clone(),
                            body,
                        },
                        span: e.span,
                    },
                    units,
                )
            }
            ExprKind::Kron(a, b) if is_numeric(a) && is_numeric(b) => {
                let (i, j) = (self.component_number(a)?, self.component_number(b)?);
                Expr {
                    kind: ExprKind::Num(BigRational::from_integer(BigInt::from((i == j) as u8))),
                    span: e.span,
                }
            }
            ExprKind::Kron(a, b) if is_numeric(a) || is_numeric(b) => {
                // δ[mu,k] = e_k[mu].
                let (k, other) = if is_numeric(a) { (a, b) } else { (b, a) };
                let k = self.component_number(k)?;
                unit_expr(&unit_vector(k), other.clone(), e.span)
            }
            ExprKind::Normal(k) if is_numeric(k) => {
                let mut units = Vec::new();
                let index = self.replace_indices(std::slice::from_ref(k), &mut units)?;
                with_units(
                    Expr {
                        kind: ExprKind::Normal(index[0].clone()),
                        span: e.span,
                    },
                    units,
                )
            }
            ExprKind::Neg(a) => Expr {
                kind: ExprKind::Neg(Box::new(self.numeric_components(a)?)),
                span: e.span,
            },
            ExprKind::Chain { first, rest } => Expr {
                kind: ExprKind::Chain {
                    first: Box::new(self.numeric_components(first)?),
                    rest: rest
                        .iter()
                        .map(|(op, x)| {
                            if matches!(op, BinOp::Div | BinOp::Pow) {
                                self.no_components(x)?;
                            }
                            Ok((*op, self.numeric_components(x)?))
                        })
                        .collect::<Result<_>>()?,
                },
                span: e.span,
            },
            ExprKind::Binary { op, lhs, rhs } => {
                if matches!(op, BinOp::Div | BinOp::Pow) {
                    self.no_components(rhs)?;
                }
                if matches!(op, BinOp::Pow) {
                    self.no_components(lhs)?;
                }
                Expr {
                    kind: ExprKind::Binary {
                        op: *op,
                        lhs: Box::new(self.numeric_components(lhs)?),
                        rhs: Box::new(self.numeric_components(rhs)?),
                    },
                    span: e.span,
                }
            }
            ExprKind::Call {
                name,
                primes,
                orders,
                args,
                separators,
            } => Expr {
                kind: ExprKind::Call {
                    name: name.clone(),
                    primes: *primes,
                    orders: orders.clone(),
                    separators: separators.clone(),
                    args: args
                        .iter()
                        .map(|a| self.numeric_components(a))
                        .collect::<Result<_>>()?,
                },
                span: e.span,
            },
            ExprKind::Integral {
                var,
                region,
                surface,
                body,
            } => {
                let mut region = region.clone();
                if let RegionKind::Ball(c, r) = &region.kind {
                    region.kind =
                        RegionKind::Ball(c.clone(), Box::new(self.numeric_components(r)?));
                }
                Expr {
                    kind: ExprKind::Integral {
                        var: var.clone(),
                        region,
                        surface: *surface,
                        body: Box::new(self.numeric_components(body)?),
                    },
                    span: e.span,
                }
            }
            _ => e.clone(),
        })
    }

    /// Components inside a power or a denominator are refused: the
    /// contraction they become would sit under the power.
    fn no_components(&self, e: &Expr) -> Result<()> {
        match first_numeric(e) {
            None => Ok(()),
            Some(span) => Err(self
                .err(
                    ErrorKind::Index,
                    span,
                    "a component inside a power or a denominator is not supported",
                )
                .with_label("a component under a power or a division")
                .with_note("write it with distances and the normal coordinate, e.g. the mirror distance as `(|x1 - x2|^2 + 4 x1[n] x2[n])^(1/2)`, or as a product written out")),
        }
    }

    /// The indices with each numeric one replaced by a fresh name; the unit
    /// vectors to contract them with are pushed onto `units`.
    fn replace_indices(&mut self, indices: &[Name], units: &mut Vec<Expr>) -> Result<Vec<Name>> {
        let mut out = Vec::with_capacity(indices.len());
        for i in indices {
            if !is_numeric(i) {
                out.push(i.clone());
                continue;
            }
            let k = self.component_number(i)?;
            let fresh = Name {
                text: self.fresh_component_index(),
                is_var: false,
                span: i.span,
            };
            units.push(unit_expr(&unit_vector(k), fresh.clone(), i.span));
            out.push(fresh);
        }
        Ok(out)
    }

    /// The value of a numeric index, checked against a numeric dimension;
    /// declares the unit vector it needs.
    fn component_number(&mut self, n: &Name) -> Result<usize> {
        let k = n.text.parse::<usize>().ok();
        let dim = match &self.ctx.dimension {
            Some(Term::Num(d)) => d.to_integer().to_usize(),
            _ => None,
        };
        match (k, dim) {
            (Some(k), Some(d)) if k < d => {}
            (Some(_), None) if n.text.len() <= 3 => {}
            _ => {
                let range = dim.map_or("0 to d - 1".to_string(), |d| format!("0 to {}", d - 1));
                return Err(self
                    .err(
                        ErrorKind::Index,
                        n.span,
                        format!(
                            "component `{}` does not exist: components run from {range}",
                            n.text
                        ),
                    )
                    .with_label("out of range")
                    .with_note("components count from 0; the normal coordinate is the last"));
            }
        }
        let k = k.unwrap_or_default();
        let name = unit_vector(k);
        self.ctx.params.entry(name.clone()).or_insert(ParamDecl {
            name,
            rank: 1,
            parallel: false,
            antisymmetric: false,
        });
        Ok(k)
    }

    fn fresh_component_index(&self) -> String {
        let n = self.fresh.get() + 1;
        self.fresh.set(n);
        format!("ι{n}")
    }
}

/// `e_k[index]` as an expression.
fn unit_expr(unit: &str, index: Name, span: Span) -> Expr {
    Expr {
        kind: ExprKind::Component {
            name: Name {
                text: unit.to_string(),
                is_var: false,
                span,
            },
            par: false,
            indices: vec![index],
        },
        span,
    }
}

/// `e` times the unit vectors, or `e` itself when there are none.
fn with_units(e: Expr, units: Vec<Expr>) -> Expr {
    if units.is_empty() {
        return e;
    }
    let span = e.span;
    Expr {
        kind: ExprKind::Chain {
            first: Box::new(e),
            rest: units.into_iter().map(|u| (BinOp::Mul, u)).collect(),
        },
        span,
    }
}

/// Where the first numeric index of `e` is written, if any.
fn first_numeric(e: &Expr) -> Option<Span> {
    let among = |names: &[Name]| names.iter().find(|n| is_numeric(n)).map(|n| n.span);
    match &e.kind {
        ExprKind::Component { indices, .. } => among(indices),
        ExprKind::Corr(items) => items.iter().find_map(|i| match i {
            Insertion::Op(op) => among(&op.indices),
            _ => None,
        }),
        ExprKind::Op(op) => among(&op.indices),
        ExprKind::Deriv { index, body, .. } => {
            among(std::slice::from_ref(index)).or_else(|| first_numeric(body))
        }
        ExprKind::Kron(i, j) => among(&[i.clone(), j.clone()]),
        ExprKind::Normal(i) => among(std::slice::from_ref(i)),
        ExprKind::Neg(a) => first_numeric(a),
        ExprKind::Chain { first, rest } => {
            first_numeric(first).or_else(|| rest.iter().find_map(|(_, x)| first_numeric(x)))
        }
        ExprKind::Binary { lhs, rhs, .. } => first_numeric(lhs).or_else(|| first_numeric(rhs)),
        ExprKind::Call { args, .. } => args.iter().find_map(first_numeric),
        ExprKind::Integral { body, .. } | ExprKind::Sum { body, .. } => first_numeric(body),
        _ => None,
    }
}
