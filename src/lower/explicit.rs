//! Lowering of explicit functions and integrals: distances, coordinates,
//! parameter vectors, unknown functions and the cross-ratio ξ, conformal
//! Killing vectors (expanded into coordinates at lowering), regions,
//! `place` facts and `classify`.

use super::{Declared, Lowerer};
use crate::context::{Killing, ParamDecl, Placement};
use crate::diagnostic::{ErrorKind, Result};
use crate::syntax::ast::{
    Expr, ExprKind, Generator, Name, OpRef, PlaceKind, PointRef, RegionKind, RegionRef, Span,
    VectorParam,
};
use crate::term::{Index, Integral, Point, Region, Term};

/// Name of the built-in boundary cross-ratio.
pub const CROSS_RATIO: &str = "xi";
/// Name of the outward normal of a surface integral.
pub const OUTWARD_NORMAL: &str = "N";

impl Lowerer {
    // ───────────────────────── declarations ─────────────────────────

    pub(super) fn declare_killing(&mut self, name: &Name, generator: &Generator) -> Result<()> {
        self.new_name(name, Declared::Killing)?;
        let killing = match generator {
            Generator::Translation(v) => Killing::Translation(self.vector_param(v)?),
            Generator::Special(v) => Killing::Special(self.vector_param(v)?),
            Generator::Dilatation(lambda) => {
                self.declare_param(lambda, 0, false, false)?;
                Killing::Dilatation(lambda.text.clone())
            }
            Generator::Rotation { omega, parallel } => {
                if *parallel {
                    self.need_halfspace(omega.span, "a parallel rotation")?;
                }
                self.declare_param(omega, 2, *parallel, true)?;
                Killing::Rotation(omega.text.clone())
            }
            Generator::Mixing(e) => {
                self.need_halfspace(e.span, "a rotation mixing n with a parallel direction")?;
                self.declare_param(e, 1, true, false)?;
                Killing::Mixing(e.text.clone())
            }
        };
        self.ctx.killing.insert(name.text.clone(), killing);
        Ok(())
    }

    fn vector_param(&mut self, v: &VectorParam) -> Result<Option<String>> {
        match v {
            VectorParam::Normal(span) => {
                self.need_halfspace(*span, "the normal n")?;
                Ok(None)
            }
            VectorParam::Named { name, parallel } => {
                if *parallel {
                    self.need_halfspace(name.span, "a parallel vector")?;
                }
                self.declare_param(name, 1, *parallel, false)?;
                Ok(Some(name.text.clone()))
            }
        }
    }

    /// Declares a parameter of the given rank, or checks an earlier
    /// declaration agrees.
    fn declare_param(
        &mut self,
        name: &Name,
        rank: usize,
        parallel: bool,
        antisymmetric: bool,
    ) -> Result<()> {
        if rank == 0 {
            if self.ctx.parameters.contains(&name.text) {
                return Ok(());
            }
            self.new_name(name, Declared::Parameter)?;
            self.ctx.parameters.insert(name.text.clone());
            return Ok(());
        }
        let decl = ParamDecl {
            name: name.text.clone(),
            rank,
            parallel,
            antisymmetric,
        };
        if let Some(old) = self.ctx.params.get(&name.text) {
            if *old != decl {
                return Err(self
                    .err(
                        ErrorKind::Name,
                        name.span,
                        format!("`{}` is already a parameter of another kind", name.text),
                    )
                    .with_label("declared again differently"));
            }
            return Ok(());
        }
        self.new_name(name, Declared::Vector)?;
        self.ctx.params.insert(name.text.clone(), decl);
        Ok(())
    }

    pub(super) fn declare_place(
        &mut self,
        point: &PointRef,
        kind: PlaceKind,
        region: &RegionRef,
    ) -> Result<()> {
        let p = self.point(point)?;
        let region = self.region(region)?;
        if let Region::Ball(center, _) = &region {
            if center.name == p.name {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        point.span,
                        "the center of a ball is always inside it",
                    )
                    .with_label("the center"));
            }
        }
        let placement = match kind {
            PlaceKind::Inside => Placement::Inside,
            PlaceKind::Outside => Placement::Outside,
            PlaceKind::On => Placement::OnSurface,
        };
        self.ctx.placements.push((p.name, region, placement));
        Ok(())
    }

    /// The family of a Killing vector and its normal component on the
    /// boundary, ε[n](s) at a boundary point s.
    pub(super) fn classify(&self, name: &Name) -> Result<(&'static str, Term)> {
        self.need_halfspace(name.span, "classifying a generator as preserved or broken")?;
        let Some(killing) = self.ctx.killing.get(&name.text) else {
            return Err(self
                .err(
                    ErrorKind::Name,
                    name.span,
                    format!("`{}` is not a Killing vector", name.text),
                )
                .with_label("not declared with `killing`"));
        };
        let at = self
            .ctx
            .points
            .iter()
            .enumerate()
            .find(|(_, p)| p.boundary)
            .map(|(rank, p)| Point::named(rank as u32, p.name.clone()))
            .or_else(|| {
                self.ctx
                    .points
                    .iter()
                    .enumerate()
                    .find(|(_, p)| !p.boundary)
                    .map(|(rank, p)| Point {
                        rank: rank as u32,
                        par: true,
                        name: p.name.clone(),
                    })
            })
            .ok_or_else(|| {
                self.err(
                    ErrorKind::Name,
                    name.span,
                    "classifying a generator needs a declared point",
                )
                .with_note("declare one, e.g. `points x`")
            })?;
        Ok((
            killing.family(),
            self.expand_killing(killing, &Index::N, &at),
        ))
    }

    // ───────────────────────── expressions ──────────────────────────

    pub(super) fn distance(&self, p: &PointRef, q: &PointRef, span: Span) -> Result<Term> {
        let a = self.point(p)?;
        let b = self.point(q)?;
        if a == b {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    span,
                    format!("|{0} - {0}| is zero", a.name),
                )
                .with_label("the same point twice"));
        }
        Ok(if a < b {
            Term::Dist(a, b)
        } else {
            Term::Dist(b, a)
        })
    }

    pub(super) fn component(
        &self,
        name: &Name,
        par: bool,
        indices: &[Name],
        span: Span,
    ) -> Result<Term> {
        if par {
            let p = self.point(&PointRef {
                name: name.clone(),
                par: true,
                span,
            })?;
            if indices.len() != 1 {
                return Err(self
                    .err(ErrorKind::Index, span, "a coordinate takes one index")
                    .with_label("wrong number of indices"));
            }
            return Ok(Term::Comp(p, self.index(&indices[0])?));
        }
        let idx = indices
            .iter()
            .map(|i| self.index(i))
            .collect::<Result<Vec<_>>>()?;
        let want = |rank: usize, what: &str| -> Result<()> {
            if idx.len() == rank {
                Ok(())
            } else {
                Err(self
                    .err(
                        ErrorKind::Index,
                        name.span,
                        format!("{what} takes {rank} index(es), found {}", idx.len()),
                    )
                    .with_label("wrong number of indices"))
            }
        };
        if name.text == OUTWARD_NORMAL {
            want(1, "the outward normal N")?;
            return Ok(Term::OutNormal(idx[0].clone()));
        }
        if let Some((rank, _)) = self.ctx.point(&name.text) {
            want(1, "a coordinate")?;
            return Ok(Term::Comp(
                Point::named(rank, name.text.clone()),
                idx[0].clone(),
            ));
        }
        if let Some(decl) = self.ctx.params.get(&name.text) {
            want(decl.rank, &format!("`{}`", name.text))?;
            return Ok(Term::Param(name.text.clone(), idx));
        }
        if self.ctx.killing.contains_key(&name.text) {
            return Err(self
                .err(
                    ErrorKind::Name,
                    name.span,
                    format!("the Killing vector `{}` takes a point", name.text),
                )
                .with_label("missing point")
                .with_note(format!(
                    "write e.g. `{}[{}](x)`",
                    name.text,
                    indices.first().map_or("mu", |i| i.text.as_str())
                )));
        }
        Err(match self.declared_kind(&name.text) {
            Some(kind) => self
                .err(
                    ErrorKind::Name,
                    name.span,
                    format!(
                        "`{}` is {kind}, not a point or a parameter with indices",
                        name.text
                    ),
                )
                .with_label("takes no components"),
            None => self.undeclared(
                name,
                "vector",
                &format!("killing eps translation {}", name.text),
            ),
        })
    }

    pub(super) fn call(&self, name: &Name, primes: u32, args: &[Expr], span: Span) -> Result<Term> {
        if name.text == CROSS_RATIO {
            self.need_halfspace(span, "the cross-ratio xi")?;
            let points: Vec<Point> = args
                .iter()
                .map(|a| match &a.kind {
                    ExprKind::Name(n) => self.point(&PointRef {
                        name: n.clone(),
                        par: false,
                        span: n.span,
                    }),
                    _ => Err(self
                        .err(ErrorKind::Syntax, a.span, "xi takes two bulk points")
                        .with_label("not a point")),
                })
                .collect::<Result<_>>()?;
            let [p, q] = &points[..] else {
                return Err(self
                    .err(
                        ErrorKind::Syntax,
                        span,
                        "xi takes two bulk points: xi(x1, x2)",
                    )
                    .with_label("wrong number of arguments"));
            };
            if primes > 0
                || p == q
                || self.ctx.is_boundary_point(p)
                || self.ctx.is_boundary_point(q)
            {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        span,
                        "xi takes two different bulk points: xi(x1, x2)",
                    )
                    .with_label("not a cross-ratio"));
            }
            // ξ = |p - q|² / (4 y_p y_q).
            let (a, b) = if p < q { (p, q) } else { (q, p) };
            return Ok(Term::Mul(vec![
                Term::Pow(
                    Box::new(Term::Dist(a.clone(), b.clone())),
                    Box::new(Term::int(2)),
                ),
                Term::Pow(
                    Box::new(Term::Mul(vec![
                        Term::int(4),
                        Term::Comp(p.clone(), Index::N),
                        Term::Comp(q.clone(), Index::N),
                    ])),
                    Box::new(Term::int(-1)),
                ),
            ]));
        }
        // `g (a + b)` is a product, not a call, when g is a number.
        let is_number = name.text == crate::context::DIMENSION
            || matches!(
                self.declared.get(&name.text),
                Some((Declared::Parameter | Declared::Let, _))
            );
        if is_number && primes == 0 && args.len() == 1 {
            let factor = self.scalar_name(name)?;
            return Ok(Term::Mul(vec![factor, self.expr(&args[0])?]));
        }
        if !self.ctx.functions.contains(&name.text) {
            return Err(match self.declared_kind(&name.text) {
                Some(kind) => self
                    .err(
                        ErrorKind::Name,
                        name.span,
                        format!("`{}` is {kind}, not a function", name.text),
                    )
                    .with_label("called like a function"),
                None => self.undeclared(name, "function", &format!("function {}", name.text)),
            });
        }
        if args.len() != 1 {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    format!("`{}` is a function of one variable", name.text),
                )
                .with_label("wrong number of arguments"));
        }
        let arg = self.expr(&args[0])?;
        Ok(Term::Fun(name.text.clone(), primes, vec![arg]))
    }

    pub(super) fn integral(
        &self,
        var: &PointRef,
        region: &RegionRef,
        surface: bool,
        body: &Expr,
    ) -> Result<Term> {
        let v = self.point(var)?;
        let region = self.region(region)?;
        let on_boundary = self.ctx.is_boundary_point(&v);
        match (&region, on_boundary) {
            (Region::Boundary, false) => {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        var.span,
                        "a boundary integral runs over a boundary point or a projection x∥",
                    )
                    .with_label("a bulk point"))
            }
            (Region::Boundary, true) if surface => {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        var.span,
                        "the boundary plane has no surface to integrate over",
                    )
                    .with_label("here"))
            }
            (Region::Space | Region::Halfspace | Region::Ball(..), true) => {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        var.span,
                        "a bulk region is integrated over a bulk point",
                    )
                    .with_label("a boundary point"))
            }
            _ => {}
        }
        if let Region::Ball(center, _) = &region {
            if center.name == v.name {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        var.span,
                        "the integration point cannot be the center of its own ball",
                    )
                    .with_label("bound here"));
            }
        }
        Ok(Term::Integral(Box::new(Integral {
            var: v,
            region,
            surface,
            body: self.expr(body)?,
        })))
    }

    pub(super) fn region(&self, r: &RegionRef) -> Result<Region> {
        Ok(match &r.kind {
            RegionKind::Space => Region::Space,
            RegionKind::Halfspace => {
                self.need_halfspace(r.span, "the half-space region")?;
                Region::Halfspace
            }
            RegionKind::Boundary => {
                self.need_halfspace(r.span, "the boundary region")?;
                Region::Boundary
            }
            RegionKind::Ball(center, radius) => {
                let c = self.point(center)?;
                if self.ctx.is_boundary_point(&c) {
                    return Err(self
                        .err(
                            ErrorKind::Placement,
                            center.span,
                            "a ball is centered at a bulk point",
                        )
                        .with_label("a boundary point"));
                }
                Region::Ball(c, self.expr(radius)?)
            }
        })
    }

    /// `eps[nu](x)`: the Killing vector's component at a point, expanded.
    pub(super) fn killing_vector(&self, op: &OpRef) -> Result<Term> {
        let killing = &self.ctx.killing[&op.name.text];
        if op.indices.len() != 1 {
            return Err(self
                .err(
                    ErrorKind::Index,
                    op.span,
                    format!("the Killing vector `{}` takes one index", op.name.text),
                )
                .with_label("wrong number of indices"));
        }
        let index = self.index(&op.indices[0])?;
        let point = self.point(&op.point)?;
        Ok(self.expand_killing(killing, &index, &point))
    }

    /// ε_i(p) for each family (PHYSICS.md §1; common practice).
    fn expand_killing(&self, killing: &Killing, i: &Index, p: &Point) -> Term {
        let x = |j: &Index| Term::Comp(p.clone(), j.clone());
        let vector = |param: &Option<String>, j: &Index| match param {
            Some(a) => Term::Param(a.clone(), vec![j.clone()]),
            None => Term::Normal(j.clone()),
        };
        match killing {
            Killing::Translation(a) => vector(a, i),
            Killing::Dilatation(lambda) => Term::Mul(vec![Term::Sym(lambda.clone()), x(i)]),
            Killing::Rotation(omega) => {
                let k = self.fresh_index();
                Term::Mul(vec![
                    Term::Param(omega.clone(), vec![i.clone(), k.clone()]),
                    x(&k),
                ])
            }
            Killing::Mixing(e) => {
                let k = self.fresh_index();
                Term::Add(vec![
                    Term::Mul(vec![
                        Term::Normal(i.clone()),
                        Term::Param(e.clone(), vec![k.clone()]),
                        x(&k),
                    ]),
                    Term::Mul(vec![
                        Term::int(-1),
                        Term::Param(e.clone(), vec![i.clone()]),
                        x(&Index::N),
                    ]),
                ])
            }
            Killing::Special(b) => {
                let k = self.fresh_index();
                let l = self.fresh_index();
                Term::Add(vec![
                    Term::Mul(vec![Term::int(2), vector(b, &k), x(&k), x(i)]),
                    Term::Mul(vec![Term::int(-1), x(&l), x(&l), vector(b, i)]),
                ])
            }
        }
    }

    /// A summation index no user can write (normalisation renames it).
    fn fresh_index(&self) -> Index {
        let n = self.fresh.get() + 1;
        self.fresh.set(n);
        Index::Named(format!("κ{n}"))
    }

    fn declared_kind(&self, name: &str) -> Option<&'static str> {
        self.declared.get(name).map(|(kind, _)| kind.describe())
    }
}
