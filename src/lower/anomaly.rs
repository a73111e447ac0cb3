//! Named quantities of the displacement operator: its normalised two- and
//! three-point coefficients and, in d = 4, the boundary anomaly
//! coefficients they fix (docs/conventions.md §10).
//!
//! Each is a call on boundary points that lowers to an ordinary term with
//! correlators of `D`, so it can stand in any statement (`evaluate`,
//! `compare`, `scan`, a claim):
//!
//! - `C_D(s1, s2)` = ⟨D(s1) D(s2)⟩ |s1 - s2|^{2d};
//! - `C_DDD(s1, s2, s3)` = ⟨D(s1) D(s2) D(s3)⟩ |s12|^d |s13|^d |s23|^d;
//! - `b2(s1, s2)` = (2π⁴/15) C_D = (S_4²/30) C_D, d = 4 only;
//! - `b1(s1, s2, s3)` = (2π⁶/35) C_DDD = (S_4³/140) C_DDD, d = 4 only,
//!
//! (Herzog, Huang & Jensen 2017, arXiv:1709.07431; Herzog & Huang 2017,
//! arXiv:1707.06224 for b2). A name the file declares (a parameter, a
//! function, an operator, a `let`) keeps the file's meaning.

use super::Lowerer;
use crate::context::{DISPLACEMENT, SPHERE_AREA};
use crate::diagnostic::{ErrorKind, Result};
use crate::syntax::ast::{Expr, ExprKind, Name, PointRef, Span};
use crate::term::{Op, Point, Term};

/// The quantities, by name.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Quantity {
    TwoPoint,
    ThreePoint,
    B2,
    B1,
}

impl Quantity {
    fn of(name: &str) -> Option<Quantity> {
        match name {
            "C_D" => Some(Quantity::TwoPoint),
            "C_DDD" => Some(Quantity::ThreePoint),
            "b2" => Some(Quantity::B2),
            "b1" => Some(Quantity::B1),
            _ => None,
        }
    }

    fn points(self) -> usize {
        match self {
            Quantity::TwoPoint | Quantity::B2 => 2,
            Quantity::ThreePoint | Quantity::B1 => 3,
        }
    }

    fn form(self) -> &'static str {
        match self {
            Quantity::TwoPoint => "C_D(s1, s2) = <D(s1) D(s2)> |s1 - s2|^(2 d)",
            Quantity::ThreePoint => {
                "C_DDD(s1, s2, s3) = <D(s1) D(s2) D(s3)> (|s1 - s2| |s1 - s3| |s2 - s3|)^d"
            }
            Quantity::B2 => "b2(s1, s2) = (2 π^4/15) C_D(s1, s2), in d = 4",
            Quantity::B1 => "b1(s1, s2, s3) = (2 π^6/35) C_DDD(s1, s2, s3), in d = 4",
        }
    }
}

impl Lowerer {
    /// True when `name` is one of the displacement quantities and the file
    /// gives it no meaning of its own.
    pub(super) fn is_displacement_quantity(&self, name: &str) -> bool {
        Quantity::of(name).is_some()
            && self.ctx.operator(name).is_none()
            && !self.ctx.functions.contains(name)
            && !self.scope.lets.contains_key(name)
            && !self.declared.contains_key(name)
    }

    /// Lowers `C_D(…)`, `C_DDD(…)`, `b1(…)` or `b2(…)`.
    pub(super) fn displacement_quantity(
        &self,
        name: &Name,
        primes: u32,
        args: &[Expr],
        span: Span,
    ) -> Result<Term> {
        let Some(q) = Quantity::of(&name.text) else {
            return Err(self.err(ErrorKind::Name, name.span, "not a displacement quantity"));
        };
        self.need_halfspace(span, &format!("`{}`", name.text))?;
        if primes > 0 {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    name.span,
                    format!("`{}` is a number, and cannot carry primes", name.text),
                )
                .with_label("primes")
                .with_note(q.form()));
        }
        if matches!(q, Quantity::B1 | Quantity::B2) && self.ctx.dimension != Some(Term::int(4)) {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    span,
                    format!(
                        "`{}` is a boundary anomaly coefficient of four dimensions",
                        name.text
                    ),
                )
                .with_label("needs `dimension 4`")
                .with_note(q.form())
                .with_note("in other dimensions use C_D(s1, s2) and C_DDD(s1, s2, s3)"));
        }
        if args.len() != q.points() {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    format!(
                        "`{}` takes {} boundary points, found {} argument{}",
                        name.text,
                        q.points(),
                        args.len(),
                        if args.len() == 1 { "" } else { "s" }
                    ),
                )
                .with_label("wrong number of arguments")
                .with_note(q.form()));
        }
        let mut points: Vec<Point> = Vec::new();
        for arg in args {
            let ExprKind::Name(n) = &arg.kind else {
                return Err(self
                    .err(
                        ErrorKind::Syntax,
                        arg.span,
                        format!("`{}` takes boundary points, not expressions", name.text),
                    )
                    .with_label("not a point")
                    .with_note(q.form()));
            };
            let p = self.point(&PointRef {
                name: n.clone(),
                par: false,
                span: n.span,
            })?;
            if !self.ctx.is_boundary_point(&p) {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        arg.span,
                        format!(
                            "`{}` takes boundary points, and `{}` is a bulk point",
                            name.text, n.text
                        ),
                    )
                    .with_label("a bulk point")
                    .with_note("declare them with `boundary points s1 s2 s3`"));
            }
            if points.contains(&p) {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        arg.span,
                        format!(
                            "`{}` takes distinct points; `{}` is repeated",
                            name.text, n.text
                        ),
                    )
                    .with_label("the same point again")
                    .with_note(q.form()));
            }
            points.push(p);
        }
        let d = self.ctx.dim();
        let corr = Term::Corr(
            points
                .iter()
                .map(|p| Op {
                    point: p.clone(),
                    name: DISPLACEMENT.to_string(),
                    indices: Vec::new(),
                })
                .collect(),
        );
        let dist = |a: &Point, b: &Point, e: Term| {
            let (a, b) = if a < b { (a, b) } else { (b, a) };
            Term::Pow(Box::new(Term::Dist(a.clone(), b.clone())), Box::new(e))
        };
        let mut factors = vec![corr];
        if points.len() == 2 {
            factors.push(dist(
                &points[0],
                &points[1],
                Term::Mul(vec![Term::int(2), d]),
            ));
        } else {
            for (i, j) in [(0, 1), (0, 2), (1, 2)] {
                factors.push(dist(&points[i], &points[j], d.clone()));
            }
        }
        // 2π⁴/15 = S_4²/30 and 2π⁶/35 = S_4³/140, with S_4 = 2π².
        let sphere = || Term::Sym(SPHERE_AREA.to_string());
        match q {
            Quantity::B2 => factors.extend([
                Term::Pow(Box::new(sphere()), Box::new(Term::int(2))),
                Term::Num(num_rational::BigRational::new(1.into(), 30.into())),
            ]),
            Quantity::B1 => factors.extend([
                Term::Pow(Box::new(sphere()), Box::new(Term::int(3))),
                Term::Num(num_rational::BigRational::new(1.into(), 140.into())),
            ]),
            Quantity::TwoPoint | Quantity::ThreePoint => {}
        }
        Ok(Term::Mul(factors))
    }
}
