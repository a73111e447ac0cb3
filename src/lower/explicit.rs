//! Lowering of explicit functions and integrals: distances, coordinates,
//! parameter vectors, unknown functions and the cross-ratio ξ, conformal
//! Killing vectors (expanded into coordinates at lowering), regions,
//! `place` facts and `classify`.

use std::cell::{Cell, RefCell};
use std::collections::BTreeMap;

use num_rational::BigRational;
use num_traits::{Signed, Zero};

use super::{constant_value, count_indices, indices, is_constant_term, Declared, Lowerer};
use crate::context::{Killing, ParamDecl, Placement, DIMENSION};
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::syntax::ast::{
    self, Expr, ExprKind, Generator, Name, OpRef, PlaceKind, PointRef, RegionKind, RegionRef, Span,
    Stmt, VectorParam,
};
use crate::term::{Index, Integral, Point, Region, Term};

/// Name of the built-in boundary cross-ratio.
pub const CROSS_RATIO: &str = "xi";
/// Name of the outward normal of a surface integral.
pub const OUTWARD_NORMAL: &str = "N";

/// What lowering knows about the place of the expression at hand: the
/// `let` statements of the whole file (so that a use before the definition
/// is told apart from an undeclared name), the `let` being defined, and how
/// many surface integrals enclose the expression (the outward normal `N`
/// exists only inside one).
#[derive(Debug, Default)]
pub(super) struct Scope {
    /// Each name defined by `let`, with the span of its first definition.
    pub(super) lets: BTreeMap<String, Span>,
    /// The name of the `let` whose expression is being lowered.
    pub(super) defining: RefCell<Option<String>>,
    /// The number of enclosing surface integrals.
    surfaces: Cell<u32>,
}

impl Scope {
    pub(super) fn new(file: &ast::File) -> Scope {
        let mut lets = BTreeMap::new();
        for stmt in &file.stmts {
            if let Stmt::Let { name, .. } = stmt {
                lets.entry(name.text.clone()).or_insert(name.span);
            }
        }
        Scope {
            lets,
            ..Scope::default()
        }
    }
}

impl Lowerer {
    // ───────────────────────── declarations ─────────────────────────

    pub(super) fn declare_killing(&mut self, name: &Name, generator: &Generator) -> Result<()> {
        self.new_name(name, Declared::Killing)?;
        let killing = match generator {
            Generator::Translation(v) => Killing::Translation(self.vector_param(v, "translation")?),
            Generator::Special(v) => Killing::Special(self.vector_param(v, "special")?),
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

    /// The vector of a `translation` or `special` generator (`family`).
    fn vector_param(&mut self, v: &VectorParam, family: &str) -> Result<Option<String>> {
        match v {
            VectorParam::Normal { span, parallel } => {
                let what = match family {
                    "translation" => "a translation along the normal n",
                    _ => "a special conformal transformation along the normal n",
                };
                self.need_halfspace(*span, what)?;
                if let Some(parallel) = parallel {
                    return Err(self
                        .err(
                            ErrorKind::Placement,
                            *parallel,
                            "the normal n is not parallel to the boundary",
                        )
                        .with_label("contradicts `n`")
                        .with_note(format!(
                            "write `{family} n` for the normal direction, or name a parallel vector: `{family} a parallel`"
                        )));
                }
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

    /// `parameters a[mu]`, `omega[mu,nu]`: a vector or a tensor, parallel to
    /// the wall when its indices are declared `parallel`.
    pub(super) fn declare_tensor_parameter(&mut self, name: &Name, indices: &[Name]) -> Result<()> {
        if indices.len() > 2 {
            return Err(self
                .err(
                    ErrorKind::Index,
                    name.span,
                    "a parameter has at most two indices",
                )
                .with_label("too many indices")
                .with_note("declare a vector `a[mu]` or a tensor `omega[mu,nu]`"));
        }
        for (k, i) in indices.iter().enumerate() {
            if i.is_var
                || i.text == crate::context::NORMAL
                || i.text.bytes().all(|b| b.is_ascii_digit())
            {
                return Err(self
                    .err(
                        ErrorKind::Index,
                        i.span,
                        "the indices of a declared parameter are names",
                    )
                    .with_label("not an index name")
                    .with_note("write e.g. `parameters a[mu]`"));
            }
            if indices[..k].iter().any(|j| j.text == i.text) {
                return Err(self
                    .err(
                        ErrorKind::Index,
                        i.span,
                        "the indices of a declared parameter are different names",
                    )
                    .with_label("written twice"));
            }
        }
        let parallel_names = indices
            .iter()
            .filter(|i| self.ctx.parallel.contains(&i.text))
            .count();
        if parallel_names != 0 && parallel_names != indices.len() {
            return Err(self
                .err(
                    ErrorKind::Index,
                    name.span,
                    "a parameter's indices are all parallel to the wall or none is",
                )
                .with_label("parallel and bulk indices mixed"));
        }
        if self.declared.contains_key(&name.text) || self.ctx.params.contains_key(&name.text) {
            self.new_name(name, Declared::Vector)?;
        }
        self.declare_param(name, indices.len(), parallel_names != 0, false)
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
                        format!(
                            "`{}` is already {}, and cannot also be {}",
                            name.text,
                            describe_param(old),
                            describe_param(&decl)
                        ),
                    )
                    .with_label("declared again differently")
                    .with_note("give the parameter of this generator another name"));
            }
            return Ok(());
        }
        self.new_name(name, Declared::Vector)?;
        self.ctx.params.insert(name.text.clone(), decl);
        Ok(())
    }

    /// `place x at (c1, …, cd)`: exact coordinates, the normal one last.
    pub(super) fn declare_position(
        &mut self,
        point: &PointRef,
        coords: &[Expr],
        span: Span,
    ) -> Result<()> {
        let p = self.point(point)?;
        if p.par {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    point.span,
                    "`place … at` takes a declared point, not a projection",
                )
                .with_label("a projection"));
        }
        let mut values = Vec::with_capacity(coords.len());
        let mut moving = Vec::new();
        for c in coords {
            if let Some(v) = constant_value(c) {
                values.push(v);
                moving.push(Term::Num(values.last().cloned().unwrap_or_default()));
                continue;
            }
            // A coordinate that depends on parameters (`(0, 0, h)`): its
            // value is worked out where the numeric statements run, so a
            // `scan` may move the point.
            let t = self.expr(c)?;
            if !is_constant_term(&t) {
                return Err(self
                    .err(ErrorKind::Syntax, c.span, "a coordinate is a number or an expression in parameters")
                    .with_label("mentions points, indices or correlators")
                    .with_note("write e.g. `place x2 at (0, 1/2, 3)` or, with `parameters h`, `place x2 at (0, 0, h)`"));
            }
            values.push(BigRational::zero());
            moving.push(t);
        }
        let is_moving = moving.iter().any(|t| !matches!(t, Term::Num(_)));
        if let Some(Term::Num(d)) = &self.ctx.dimension {
            if BigRational::from_integer(values.len().into()) != *d {
                return Err(self
                    .err(
                        ErrorKind::Syntax,
                        span,
                        format!(
                            "a point in dimension {d} has {d} coordinates, found {}",
                            values.len()
                        ),
                    )
                    .with_label("wrong number of coordinates"));
            }
        }
        let normal_moves = is_moving && !matches!(moving.last(), Some(Term::Num(_)));
        if normal_moves && self.ctx.is_boundary_point(&p) {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    span,
                    format!(
                        "the normal coordinate of `{}` must be 0 (a boundary point)",
                        p.name
                    ),
                )
                .with_label("the last coordinate is the distance to the wall"));
        }
        if self.ctx.has_halfspace() && (!normal_moves || self.ctx.is_boundary_point(&p)) {
            let y = values.last().cloned().unwrap_or_default();
            let on_wall = self.ctx.is_boundary_point(&p);
            if on_wall != y.is_zero() || y.is_negative() {
                let want = if on_wall {
                    "0 (a boundary point)"
                } else {
                    "positive (a bulk point)"
                };
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        span,
                        format!("the normal coordinate of `{}` must be {want}", p.name),
                    )
                    .with_label("the last coordinate is the distance to the wall"));
            }
        }
        if self.ctx.positions.contains_key(&*p.name) || self.ctx.moving.contains_key(&*p.name) {
            return Err(self
                .err(
                    ErrorKind::Name,
                    point.span,
                    format!("`{}` already has a position", p.name),
                )
                .with_label("placed twice"));
        }
        if is_moving {
            self.ctx.moving.insert(p.name.to_string(), moving);
        } else {
            self.ctx.positions.insert(p.name.to_string(), values);
        }
        Ok(())
    }

    /// `place ball(c, r) inside halfspace`: the ball stays clear of the
    /// wall (its centre is a bulk point higher than r).
    pub(super) fn declare_ball_inside(&mut self, region: &RegionRef) -> Result<()> {
        self.need_halfspace(region.span, "a ball inside the half-space")?;
        let lowered = self.region(region)?;
        let Region::Ball(center, _) = &lowered else {
            return Ok(());
        };
        if self.ctx.is_boundary_point(center) {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    region.span,
                    format!(
                        "a ball around the boundary point `{}` reaches the wall",
                        center.name
                    ),
                )
                .with_label("centred on the wall")
                .with_note("only a ball around a bulk point can lie inside the half-space"));
        }
        self.ctx.balls_inside.push(lowered);
        Ok(())
    }

    pub(super) fn declare_place(
        &mut self,
        point: &PointRef,
        kind: PlaceKind,
        region: &RegionRef,
    ) -> Result<()> {
        let p = self.point(point)?;
        if p.par {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    point.span,
                    "`place` takes a declared point, not a projection",
                )
                .with_label("a projection")
                .with_note(format!(
                    "place the point itself, e.g. `place {} outside ball(x1, r)`",
                    p.name
                )));
        }
        let region_span = region.span;
        let region = self.region(region)?;
        let Region::Ball(center, _) = &region else {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    region_span,
                    "`place` states where a point lies relative to a ball",
                )
                .with_label("not a ball")
                .with_note("every point lies in `space`, bulk points in `halfspace` and boundary points on `boundary`; only balls need a `place`, e.g. `place x2 outside ball(x1, r)`"));
        };
        if center.name == p.name {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    point.span,
                    "the center of a ball is always inside it",
                )
                .with_label("the center")
                .with_note(
                    "`place` is for the other points, e.g. `place x2 outside ball(x1, r)`",
                ));
        }
        let placement = match kind {
            PlaceKind::Inside => Placement::Inside,
            PlaceKind::Outside => Placement::Outside,
            PlaceKind::On => Placement::OnSurface,
        };
        let earlier = self
            .ctx
            .placements
            .iter()
            .find(|(name, r, _)| **name == *p.name && *r == region);
        if let Some((_, _, before)) = earlier {
            if *before != placement {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        point.span,
                        format!(
                            "`{}` is already placed {} this ball",
                            p.name,
                            describe_placement(*before)
                        ),
                    )
                    .with_label(format!("now placed {}", describe_placement(placement)))
                    .with_note(
                        "a point has one position; keep one of the two `place` statements",
                    ));
            }
            return Ok(());
        }
        self.ctx
            .placements
            .push((p.name.to_string(), region, placement));
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
                        name: p.name.as_str().into(),
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
                .with_label("the same point twice")
                .with_note("a distance is taken between two different points"));
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
        let wrong_count = |what: String, rank: usize, example: String| {
            self.err(
                ErrorKind::Index,
                span,
                format!(
                    "{what} takes {}, found {}",
                    count_indices(rank),
                    indices.len()
                ),
            )
            .with_label("wrong number of indices")
            .with_note(format!("write e.g. `{example}`"))
        };
        if par {
            let p = self.point(&PointRef {
                name: name.clone(),
                par: true,
                span,
            })?;
            if indices.len() != 1 {
                return Err(wrong_count(
                    format!("the coordinate `{}∥[…]`", name.text),
                    1,
                    format!("{}∥[a]", name.text),
                ));
            }
            return Ok(Term::Comp(p, self.index(&indices[0])?));
        }
        let idx = indices
            .iter()
            .map(|i| self.index(i))
            .collect::<Result<Vec<_>>>()?;
        // `N` is the outward normal inside a surface integral; elsewhere it
        // may be a name the file declares.
        let in_surface = self.scope.surfaces.get() > 0;
        if name.text == OUTWARD_NORMAL && (in_surface || !self.declared.contains_key(&name.text)) {
            if !in_surface {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        span,
                        "the outward normal N exists only inside a surface integral",
                    )
                    .with_label("outside any `∮`")
                    .with_note(
                        "write it inside a surface integral, e.g. `∮[x on ball(x1, r)] { N[mu] … }`",
                    ));
            }
            if idx.len() != 1 {
                return Err(wrong_count(
                    "the outward normal N".into(),
                    1,
                    "N[mu]".into(),
                ));
            }
            return Ok(Term::OutNormal(idx[0].clone()));
        }
        if let Some((rank, _)) = self.ctx.point(&name.text) {
            if idx.len() != 1 {
                return Err(wrong_count(
                    format!("the coordinate `{}[…]`", name.text),
                    1,
                    format!("{}[mu]", name.text),
                ));
            }
            return Ok(Term::Comp(
                Point::named(rank, name.text.clone()),
                idx[0].clone(),
            ));
        }
        if crate::lower::unit_vector_component(&name.text).is_some() && !self.in_numeric.get() {
            return Err(self
                .err(
                    ErrorKind::Index,
                    span,
                    "a numeric component (`x1[0]`) is for numeric statements, and this named expression holds one",
                )
                .with_label("used in a symbolic statement")
                .with_note("`evaluate`, `compare`, `solve` and `scan` take components; here write the expression with a free index"));
        }
        if let Some(decl) = self.ctx.params.get(&name.text) {
            if idx.len() != decl.rank {
                let example = match decl.rank {
                    1 => format!("{}[mu]", name.text),
                    _ => format!("{}[mu,nu]", name.text),
                };
                return Err(wrong_count(format!("`{}`", name.text), decl.rank, example));
            }
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
            None => self
                .err(
                    ErrorKind::Name,
                    name.span,
                    format!("undeclared point or vector `{}`", name.text),
                )
                .with_label("not declared")
                .with_note(format!(
                    "declare a point (`points {0}`), or a vector parameter with the Killing vector it belongs to (`killing eps translation {0}`)",
                    name.text
                )),
        })
    }

    /// `g(u)` for a name that is not a function: the product g·u when g is
    /// a number (a parameter, `d`, a named expression), an error otherwise.
    pub(super) fn number_call(&self, name: &Name, primes: u32, args: &[Expr]) -> Result<Term> {
        // `g(a + b)` is a product, not a call, when g is a number.
        let is_number = name.text == DIMENSION
            || matches!(
                self.declared.get(&name.text),
                Some((Declared::Parameter | Declared::Let, _))
            );
        if is_number && primes == 0 && args.len() == 1 {
            let factor = self.scalar_name(name)?;
            return Ok(Term::Mul(vec![factor, self.expr(&args[0])?]));
        }
        if let Some(err) = self.let_out_of_order(name) {
            return Err(err);
        }
        Err(match self.declared_kind(&name.text) {
            Some(kind) => {
                let error = self
                    .err(
                        ErrorKind::Name,
                        name.span,
                        format!("`{}` is {kind}, not a function", name.text),
                    )
                    .with_label("called like a function");
                if is_number {
                    error.with_note(format!(
                        "`{0}(u)` with one argument is the product of `{0}` and u; an unknown function is declared with `function F` and called as `F(u)`",
                        name.text
                    ))
                } else {
                    error
                }
            }
            None => self.undeclared(name, "function", &format!("function {}", name.text)),
        })
    }

    /// The cross-ratio `xi(p, q)` = |p - q|² / (4 y_p y_q) of two bulk points.
    pub(super) fn cross_ratio(
        &self,
        name: &Name,
        primes: u32,
        args: &[Expr],
        span: Span,
    ) -> Result<Term> {
        const FORM: &str = "ξ = |x1 - x2|²/(4 y1 y2), written `xi(x1, x2)`";
        self.need_halfspace(span, "the cross-ratio xi")?;
        if primes > 0 {
            // Up to the opening bracket: the name and its primes.
            let text = &self.source.text[name.span.start..span.end];
            let end = name.span.start + text.find('(').unwrap_or(name.span.end - name.span.start);
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    Span::new(name.span.start, end).to(name.span),
                    "the cross-ratio xi cannot carry primes",
                )
                .with_label("primes on `xi`")
                .with_note("primes differentiate declared functions: declare `function F` and write `F'(xi(x1, x2))`"));
        }
        if args.len() != 2 {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    format!(
                        "the cross-ratio xi takes two bulk points, found {} argument{}",
                        args.len(),
                        if args.len() == 1 { "" } else { "s" }
                    ),
                )
                .with_label("wrong number of arguments")
                .with_note(FORM));
        }
        let mut points = Vec::new();
        for arg in args {
            let ExprKind::Name(n) = &arg.kind else {
                return Err(self
                    .err(
                        ErrorKind::Syntax,
                        arg.span,
                        "the cross-ratio xi takes points, not expressions",
                    )
                    .with_label("not a point")
                    .with_note(FORM));
            };
            let p = self.point(&PointRef {
                name: n.clone(),
                par: false,
                span: n.span,
            })?;
            if self.ctx.is_boundary_point(&p) {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        arg.span,
                        format!(
                            "the cross-ratio xi takes bulk points, and `{}` is a boundary point",
                            n.text
                        ),
                    )
                    .with_label("a boundary point")
                    .with_note(format!(
                        "{FORM}, is infinite when a point lies on the boundary {} = 0",
                        self.ctx.normal_coord()
                    )));
            }
            points.push(p);
        }
        let [p, q] = &points[..] else {
            return Err(self.err(ErrorKind::Syntax, span, "xi takes two points"));
        };
        if p == q {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    args[1].span,
                    format!("`xi({0}, {0})` takes the same point twice", p.name),
                )
                .with_label("the same point as the first argument")
                .with_note(format!("{FORM}, relates two different bulk points")));
        }
        // ξ = |p - q|² / (4 y_p y_q).
        let (a, b) = if p < q { (p, q) } else { (q, p) };
        self.cross_ratios
            .borrow_mut()
            .insert((a.clone(), b.clone()));
        Ok(Term::Mul(vec![
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
        ]))
    }

    /// True for `F(u)` with a bare name as argument and no indices, where
    /// `F` is a function, `xi`, a parameter, a named expression or `d`: the
    /// grammar reads it as an operator insertion, but it is a call.
    pub(super) fn is_call(&self, op: &OpRef) -> bool {
        let name = &op.name.text;
        !op.name.is_var
            && !op.point.name.is_var
            && !op.point.par
            && op.indices.is_empty()
            && self.ctx.operator(name).is_none()
            && (name == CROSS_RATIO
                || self.is_displacement_quantity(name)
                || name == DIMENSION
                || self.ctx.functions.contains(name)
                || self.scope.lets.contains_key(name)
                || matches!(
                    self.declared.get(name),
                    Some((Declared::Parameter | Declared::Let, _))
                ))
    }

    /// Lowers an insertion-shaped `F(u)` (see [`Lowerer::is_call`]) as a call.
    pub(super) fn op_call(&self, op: &OpRef) -> Result<Term> {
        let arg = Expr {
            kind: ExprKind::Name(op.point.name.clone()),
            span: op.point.span,
        };
        self.call(
            &super::functions::Call {
                name: &op.name,
                primes: 0,
                orders: None,
                args: std::slice::from_ref(&arg),
                separators: &[],
            },
            op.span,
        )
    }

    /// A declared function written without its argument, or with a space
    /// before the bracket (`F (u)` is F times u).
    pub(super) fn function_without_argument(&self, n: &Name) -> Error {
        self.err(
            ErrorKind::Name,
            n.span,
            format!("the function `{}` is used without its argument", n.text),
        )
        .with_label("no argument")
        .with_note(format!(
            "the bracket follows the name without a space: `{0}(u)`, `{0}'(u)`",
            n.text
        ))
    }

    /// A name used as a number but never declared.
    pub(super) fn undeclared_scalar(&self, n: &Name) -> Error {
        self.let_out_of_order(n)
            .unwrap_or_else(|| self.undeclared(n, "parameter", &format!("parameters {}", n.text)))
    }

    /// The error for a named expression used inside its own definition or
    /// before it, if `n` is one.
    pub(super) fn let_out_of_order(&self, n: &Name) -> Option<Error> {
        if self.scope.defining.borrow().as_deref() == Some(n.text.as_str()) {
            return Some(
                self.err(
                    ErrorKind::Name,
                    n.span,
                    format!("`{}` is used inside its own definition", n.text),
                )
                .with_label("refers to itself")
                .with_note("a named expression is substituted where it is used, so it cannot refer to itself"),
            );
        }
        let defined = self.scope.lets.get(&n.text)?;
        let line = self.source.line(defined.start);
        Some(
            self.err(
                ErrorKind::Name,
                n.span,
                format!("`{}` is used before its definition", n.text),
            )
            .with_label("not defined yet")
            .with_note(format!(
                "`let {} = …` comes later, on line {line}; move it above this use",
                n.text
            )),
        )
    }

    /// An error under the first free index of `e`, if it has one: `what`
    /// must be a scalar.
    pub(super) fn index_free(&self, e: &Expr, what: &str, note: &str) -> Result<()> {
        let free = self.free_indices(e)?;
        let Some(index) = free.iter().next() else {
            return Ok(());
        };
        let span = indices::free_spans(e)
            .ok()
            .and_then(|spans| spans.get(index).copied())
            .unwrap_or(e.span);
        Err(self
            .err(
                ErrorKind::Index,
                span,
                format!("{what} cannot carry the free index `{index}`"),
            )
            .with_label(format!("`{index}` is free"))
            .with_note(note.to_string()))
    }

    pub(super) fn integral(
        &self,
        var: &PointRef,
        region: &RegionRef,
        surface: bool,
        body: &Expr,
    ) -> Result<Term> {
        let v = self.point(var)?;
        let lowered = self.region(region)?;
        let written = &self.source.text[var.span.start..var.span.end];
        let on_boundary = self.ctx.is_boundary_point(&v);
        match (&lowered, on_boundary) {
            (Region::Boundary, false) => {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        var.span,
                        format!("a boundary integral runs over a boundary point or a projection, not the bulk point `{written}`"),
                    )
                    .with_label("a bulk point")
                    .with_note(format!(
                        "integrate over the projection, `∫[{}∥ in boundary] {{ … }}`, or over a boundary point",
                        v.name
                    )))
            }
            (Region::Boundary, true) if surface => {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        region.span,
                        "the boundary plane has no surface to integrate over",
                    )
                    .with_label("a plane")
                    .with_note(format!(
                        "integrate over the plane itself: `∫[{written} in boundary] {{ … }}`"
                    )))
            }
            (Region::Space | Region::Halfspace | Region::Ball(..), true) => {
                let what = if v.par { "the projection" } else { "the boundary point" };
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        var.span,
                        format!(
                            "an integral over `{}` runs over a bulk point, not {what} `{written}`",
                            &self.source.text[region.span.start..region.span.end]
                        ),
                    )
                    .with_label("on the boundary")
                    .with_note("integrate over a bulk point, e.g. `∫[x in space] { … }`, or over the boundary with `∫[s in boundary] { … }`"))
            }
            _ => {}
        }
        if let (Region::Ball(center, radius), RegionKind::Ball(_, radius_expr)) =
            (&lowered, &region.kind)
        {
            if center.name == v.name {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        var.span,
                        "the integration point cannot be the center of its own ball",
                    )
                    .with_label("bound here")
                    .with_note(
                        "center the ball at a point other than the one integrated over, e.g. `∫[x in ball(x1, r)] { … }`",
                    ));
            }
            if radius.mentions_point(&v) {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        radius_expr.span,
                        format!(
                            "the radius of the ball depends on the integration point `{}`",
                            v.name
                        ),
                    )
                    .with_label("mentions the integration point")
                    .with_note("the region is fixed before integrating: its radius is a parameter or depends on other points"));
            }
        }
        if surface {
            self.scope.surfaces.set(self.scope.surfaces.get() + 1);
        }
        let body = self.expr(body);
        if surface {
            self.scope.surfaces.set(self.scope.surfaces.get() - 1);
        }
        Ok(Term::Integral(Box::new(Integral {
            var: v,
            region: lowered,
            surface,
            body: body?,
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
                // Around a boundary point the ball is a half-ball: its
                // surface is a hemisphere and the disc on the wall.
                if c.par {
                    return Err(self
                        .err(ErrorKind::Placement, center.span, "a ball is centered at a declared point, not at a projection")
                        .with_label("a projection")
                        .with_note("declare a boundary point (`boundary points s1`) and center the ball there"));
                }
                Region::Ball(c, self.radius(radius)?)
            }
        })
    }

    /// The radius of a ball: a scalar, positive when it is a number.
    fn radius(&self, radius: &Expr) -> Result<Term> {
        self.index_free(
            radius,
            "the radius of a ball",
            "a radius is a length, e.g. `ball(x1, r)` or `ball(x1, |x1 - x2|/2)`",
        )?;
        if let Some(value) = constant_value(radius) {
            if value.is_zero() || value.is_negative() {
                return Err(self
                    .err(
                        ErrorKind::Arithmetic,
                        radius.span,
                        "the radius of a ball must be positive",
                    )
                    .with_label(if value.is_zero() { "zero" } else { "negative" })
                    .with_note("a radius is a length, e.g. `ball(x1, r)` or `ball(x1, 1/2)`"));
            }
        }
        self.expr(radius)
    }

    /// `eps[nu](x)`: the Killing vector's component at a point, expanded.
    pub(super) fn killing_vector(&self, op: &OpRef) -> Result<Term> {
        let killing = &self.ctx.killing[&op.name.text];
        if op.indices.len() != 1 {
            return Err(self
                .err(
                    ErrorKind::Index,
                    op.span,
                    format!(
                        "the Killing vector `{}` takes 1 index, found {}",
                        op.name.text,
                        op.indices.len()
                    ),
                )
                .with_label("wrong number of indices")
                .with_note(format!("write e.g. `{}[mu](x)`", op.name.text)));
        }
        let index = self.index(&op.indices[0])?;
        let point = self.point(&op.point)?;
        Ok(self.expand_killing(killing, &index, &point))
    }

    /// ε_i(p) for each family (docs/conventions.md §2; common practice).
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

/// "a vector", "a parallel antisymmetric tensor", … for a parameter.
fn describe_param(decl: &ParamDecl) -> String {
    let parallel = if decl.parallel { "parallel " } else { "" };
    match (decl.rank, decl.antisymmetric) {
        (1, _) => format!("a {parallel}vector"),
        (_, true) if decl.parallel => "a parallel antisymmetric tensor".to_string(),
        (_, true) => "an antisymmetric tensor".to_string(),
        _ => format!("a {parallel}tensor"),
    }
}

/// `inside`, `outside` or `on the surface of`, as in "placed inside this ball".
fn describe_placement(p: Placement) -> &'static str {
    match p {
        Placement::Inside => "inside",
        Placement::Outside => "outside",
        Placement::OnSurface => "on the surface of",
    }
}
