//! Lowering of calls: unknown functions of one or several variables
//! (`F(u)`, `F'(u)`, `F[1,0](u, v)`), the Gauss hypergeometric function
//! `F21(a, b; c; z)` (also written `₂F₁(a, b; c; z)`), the conformal blocks
//! next to a wall `f_bulk(Δ; ξ)` and `f_bdy(Δ̂; ξ)` (docs/conventions.md §9),
//! the cross-ratios of four points `u(x1, x2, x3, x4)`, `v(x1, x2, x3, x4)`,
//! and functions defined in the file, `let f(t) = …`.
//!
//! A defined function and a block are expressions in their parameters:
//! the body is lowered with each parameter standing for a symbol no input
//! can spell, differentiated in it as often as the call's primes (or
//! `[k, …]`) say ([`crate::term::diff`]), and the arguments are put in its
//! place. So `f''(xi)` is the second derivative of the body in t at t = ξ,
//! and normalisation sees only explicit functions and ₂F₁.

use super::Lowerer;
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::syntax::ast::{Expr, Name, Span};
use crate::term::{diff, Term, HYP2F1, HYP2F1_ASCII};
use num_traits::Zero;

/// The bulk-channel block `f_bulk(Δ; ξ)`.
pub const BULK_BLOCK: &str = "f_bulk";
/// The boundary-channel block `f_bdy(Δ̂; ξ)`.
pub const BOUNDARY_BLOCK: &str = "f_bdy";

/// The boundary-channel block of a bulk–boundary–boundary function,
/// `f_bdy3(Δ̂, δ̂; χ)` (docs/conventions.md §15).
pub const BOUNDARY_THREE_POINT_BLOCK: &str = "f_bdy3";

/// The s-channel block of a four-point function, `g_block(Δ, ℓ; z, z̄)`
/// (d = 2 and d = 4; docs/conventions.md §14).
pub const FOUR_POINT_BLOCK: &str = "g_block";

/// The cross-ratios of four points, `u(x1, x2, x3, x4)` and `v(…)`.
pub const CROSS_RATIO_U: &str = "u";
pub const CROSS_RATIO_V: &str = "v";
/// The bulk–boundary–boundary cross-ratio `chi(x, s1, s2)`.
pub const CROSS_RATIO_CHI: &str = "chi";

const HYP_FORM: &str = "the Gauss hypergeometric function ₂F₁(a, b; c; z) is written `F21(a, b; c; z)` (or `₂F₁(a, b; c; z)`), its derivatives in z `F21'(a, b; c; z)`, `F21''(a, b; c; z)`";

/// A call as written.
pub(super) struct Call<'a> {
    pub name: &'a Name,
    pub primes: u32,
    pub orders: Option<&'a [u32]>,
    pub args: &'a [Expr],
    pub separators: &'a [char],
}

impl Lowerer {
    /// Lowers a call, whatever it names.
    pub(super) fn call(&self, c: &Call, span: Span) -> Result<Term> {
        let name = &c.name.text;
        if name == super::explicit::CROSS_RATIO && self.ctx.operator(name).is_none() {
            self.plain_call(c, span, "the cross-ratio xi")?;
            return self.cross_ratio(c.name, c.primes, c.args, span);
        }
        if self.is_displacement_quantity(name) {
            return self.displacement_quantity(c.name, c.primes, c.args, span);
        }
        if let Some((params, body)) = self.lets.get(name) {
            if !params.is_empty() {
                return self.defined_call(c, params, body, span);
            }
        }
        let declared = self.declared.contains_key(name) || name == crate::context::DIMENSION;
        if !declared {
            if name == HYP2F1 || name == HYP2F1_ASCII {
                return self.hypergeometric(c, span);
            }
            if name == BULK_BLOCK || name == BOUNDARY_BLOCK {
                return self.block(c, span);
            }
            if name == FOUR_POINT_BLOCK {
                return self.four_point_block(c, span);
            }
            if name == BOUNDARY_THREE_POINT_BLOCK {
                return self.three_point_block(c, span);
            }
            if name == CROSS_RATIO_CHI && c.args.len() == 3 {
                self.plain_call(c, span, "the cross-ratio chi")?;
                return self.three_point_ratio(c, span);
            }
            if (name == CROSS_RATIO_U || name == CROSS_RATIO_V) && c.args.len() == 4 {
                self.plain_call(c, span, &format!("the cross-ratio {name}"))?;
                return self.four_point_ratio(c);
            }
        }
        if self.ctx.functions.contains(name) {
            return self.unknown_function(c, span);
        }
        self.plain_call(c, span, &format!("`{name}`"))?;
        self.number_call(c.name, c.primes, c.args)
    }

    /// Refuses `;` separators and `[k, …]` orders where they mean nothing.
    fn plain_call(&self, c: &Call, span: Span, what: &str) -> Result<()> {
        if c.separators.contains(&';') {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    format!("{what} takes its arguments separated by `,`, not `;`"),
                )
                .with_label("`;` in the arguments")
                .with_note("`;` separates the parameters of `F21(a, b; c; z)` and of the blocks `f_bulk(Δ; ξ)`, `f_bdy(Δ̂; ξ)`"));
        }
        if c.orders.is_some() {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    c.name.span,
                    format!("{what} cannot carry derivative counts `[…]`"),
                )
                .with_label("derivatives by argument")
                .with_note(
                    "`F[1,0](u, v)` differentiates a declared function of several variables",
                ));
        }
        Ok(())
    }

    /// `F(u)`, `F'(u)`, `F(u, v)`, `F[1,0](u, v)` for a declared function.
    fn unknown_function(&self, c: &Call, span: Span) -> Result<Term> {
        let name = &c.name.text;
        if c.separators.contains(&';') {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    format!("the arguments of `{name}` are separated by `,`, not `;`"),
                )
                .with_label("`;` in the arguments"));
        }
        let n = c.args.len();
        {
            let mut arities = self.arities.borrow_mut();
            match arities.get(name) {
                Some((m, first)) if *m != n => {
                    let line = self.source.line(first.start);
                    return Err(self
                        .err(
                            ErrorKind::Syntax,
                            span,
                            format!(
                                "`{name}` is called with {n} argument{} here and with {m} on line {line}",
                                if n == 1 { "" } else { "s" }
                            ),
                        )
                        .with_label("another number of arguments")
                        .with_note("a declared function takes the same number of arguments everywhere"));
                }
                Some(_) => {}
                None => {
                    arities.insert(name.clone(), (n, span));
                }
            }
        }
        let orders = self.orders(c, n)?;
        let mut args = Vec::with_capacity(n);
        for a in c.args {
            args.push(self.expr(a)?);
        }
        Ok(Term::Fun(name.clone(), orders, args))
    }

    /// How often each of `n` arguments is differentiated: primes for a
    /// function of one variable, `[k, …]` for several.
    fn orders(&self, c: &Call, n: usize) -> Result<Vec<u32>> {
        let name = &c.name.text;
        match (c.orders, n) {
            (Some(_), _) if c.primes > 0 => Err(self
                .err(
                    ErrorKind::Syntax,
                    c.name.span,
                    "primes and derivative counts `[…]` together",
                )
                .with_label("both")
                .with_note(format!(
                    "write the derivatives one way: `{name}[2,1](u, v)`"
                ))),
            (Some(list), _) if list.len() != n => Err(self
                .err(
                    ErrorKind::Syntax,
                    c.name.span,
                    format!(
                        "{} derivative count{} for {n} argument{}",
                        list.len(),
                        if list.len() == 1 { "" } else { "s" },
                        if n == 1 { "" } else { "s" }
                    ),
                )
                .with_label("one count per argument")
                .with_note(format!(
                    "`{name}[1,0](u, v)` is the derivative in the first argument"
                ))),
            (Some(list), _) => {
                if list.iter().map(|k| u64::from(*k)).sum::<u64>() > u64::from(MAX_ORDER) {
                    return Err(self.too_many_derivatives(c.name.span));
                }
                Ok(list.to_vec())
            }
            (None, 1) => {
                if c.primes > MAX_ORDER {
                    return Err(self.too_many_derivatives(c.name.span));
                }
                Ok(vec![c.primes])
            }
            (None, _) if c.primes > 0 => Err(self
                .err(
                    ErrorKind::Syntax,
                    c.name.span,
                    format!(
                        "`{name}` has {n} arguments: primes do not say which one is differentiated"
                    ),
                )
                .with_label("primes on a function of several variables")
                .with_note(format!(
                    "give one count per argument: `{name}[1{}](…)` is the derivative in the first",
                    ",0".repeat(n.saturating_sub(1))
                ))),
            (None, _) => Ok(vec![0; n]),
        }
    }

    fn too_many_derivatives(&self, span: Span) -> Error {
        self.err(
            ErrorKind::Limit,
            span,
            format!("more than {MAX_ORDER} derivatives of one function"),
        )
        .with_label("too many derivatives")
    }

    /// χ = y² s12²/(|x - s1|² |x - s2|²) of a bulk point x (height y) and
    /// two boundary points s1, s2 (docs/conventions.md §15).
    fn three_point_ratio(&self, c: &Call, span: Span) -> Result<Term> {
        let form = "χ = y² |s1 - s2|²/(|x - s1|² |x - s2|²), written `chi(x, s1, s2)`: a bulk point, then two boundary points";
        self.need_halfspace(span, "the cross-ratio chi")?;
        if c.primes > 0 {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    c.name.span,
                    "the cross-ratio chi cannot carry primes",
                )
                .with_label("primes")
                .with_note(form));
        }
        let mut points = Vec::with_capacity(3);
        for (k, arg) in c.args.iter().enumerate() {
            let crate::syntax::ast::ExprKind::Name(n) = &arg.kind else {
                return Err(self
                    .err(
                        ErrorKind::Syntax,
                        arg.span,
                        "the cross-ratio chi takes points, not expressions",
                    )
                    .with_label("not a point")
                    .with_note(form));
            };
            let p = self.point(&crate::syntax::ast::PointRef {
                name: n.clone(),
                par: false,
                span: n.span,
            })?;
            let boundary = self.ctx.is_boundary_point(&p);
            if (k == 0) == boundary {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        arg.span,
                        if k == 0 {
                            format!("the first point of chi is a bulk point, and `{}` is a boundary point", n.text)
                        } else {
                            format!("the last two points of chi are boundary points, and `{}` is a bulk point", n.text)
                        },
                    )
                    .with_label(if k == 0 { "a boundary point" } else { "a bulk point" })
                    .with_note(form));
            }
            if points.contains(&p) {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        arg.span,
                        format!("`{}` is named twice in the cross-ratio chi", n.text),
                    )
                    .with_label("the same point again")
                    .with_note(form));
            }
            points.push(p);
        }
        let square = |i: usize, j: usize, e: i64| {
            let (a, b) = (points[i].clone(), points[j].clone());
            let (a, b) = if a < b { (a, b) } else { (b, a) };
            Term::Pow(Box::new(Term::Dist(a, b)), Box::new(Term::int(e)))
        };
        Ok(Term::Mul(vec![
            Term::Pow(
                Box::new(Term::Comp(points[0].clone(), crate::term::Index::N)),
                Box::new(Term::int(2)),
            ),
            square(1, 2, 2),
            square(0, 1, -2),
            square(0, 2, -2),
        ]))
    }

    /// u = x12² x34²/(x13² x24²) and v = x14² x23²/(x13² x24²) of four
    /// different points (Dolan & Osborn 2001, hep-th/0011040, eq. 1.2;
    /// common practice).
    fn four_point_ratio(&self, c: &Call) -> Result<Term> {
        let name = &c.name.text;
        let form = "u = |x1 - x2|² |x3 - x4|²/(|x1 - x3|² |x2 - x4|²) and v = |x1 - x4|² |x2 - x3|²/(|x1 - x3|² |x2 - x4|²), written `u(x1, x2, x3, x4)`, `v(x1, x2, x3, x4)`";
        if c.primes > 0 {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    c.name.span,
                    format!("the cross-ratio {name} cannot carry primes"),
                )
                .with_label("primes")
                .with_note(form));
        }
        let mut points = Vec::with_capacity(4);
        for arg in c.args {
            let crate::syntax::ast::ExprKind::Name(n) = &arg.kind else {
                return Err(self
                    .err(
                        ErrorKind::Syntax,
                        arg.span,
                        format!("the cross-ratio {name} takes points, not expressions"),
                    )
                    .with_label("not a point")
                    .with_note(form));
            };
            let p = self.point(&crate::syntax::ast::PointRef {
                name: n.clone(),
                par: false,
                span: n.span,
            })?;
            if points.contains(&p) {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        arg.span,
                        format!("`{}` is named twice in the cross-ratio {name}", n.text),
                    )
                    .with_label("the same point again")
                    .with_note(format!("{form}: four different points")));
            }
            points.push(p);
        }
        let square = |i: usize, j: usize| {
            let (a, b) = (points[i].clone(), points[j].clone());
            let (a, b) = if a < b { (a, b) } else { (b, a) };
            Term::Pow(Box::new(Term::Dist(a, b)), Box::new(Term::int(2)))
        };
        let inverse = |t: Term| Term::Pow(Box::new(t), Box::new(Term::int(-1)));
        let numerator = if name == CROSS_RATIO_U {
            [square(0, 1), square(2, 3)]
        } else {
            [square(0, 3), square(1, 2)]
        };
        Ok(Term::Mul(vec![
            numerator[0].clone(),
            numerator[1].clone(),
            inverse(square(0, 2)),
            inverse(square(1, 3)),
        ]))
    }

    /// `F21(a, b; c; z)` with its primes.
    fn hypergeometric(&self, c: &Call, span: Span) -> Result<Term> {
        if c.orders.is_some() {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    c.name.span,
                    "₂F₁ is differentiated in z with primes, not with counts `[…]`",
                )
                .with_label("derivative counts")
                .with_note(HYP_FORM));
        }
        if c.args.len() != 4 || c.separators != [',', ';', ';'] {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    format!(
                        "₂F₁ takes two parameters, a third after `;` and its argument after another `;`; found {} argument{}",
                        c.args.len(),
                        if c.args.len() == 1 { "" } else { "s" }
                    ),
                )
                .with_label("not `F21(a, b; c; z)`")
                .with_note(HYP_FORM));
        }
        if c.primes > MAX_ORDER {
            return Err(self.too_many_derivatives(c.name.span));
        }
        let lowered = self.parameters_then_argument(
            c.args,
            "an argument of ₂F₁",
            "the parameters a, b, c of ₂F₁ cannot depend on points",
            "only the argument z, after the last `;`, may: `F21(a, b; c; -xi(x1, x2))`",
        )?;
        let [a, b, cc, z] = <[Term; 4]>::try_from(lowered)
            .map_err(|_| Error::new(ErrorKind::Syntax, "₂F₁ takes four arguments"))?;
        Ok(Term::hyp2f1(c.primes, a, b, cc, z))
    }

    /// The lowered arguments of a special function whose last argument is
    /// its variable: every argument a scalar, and none but the last may
    /// depend on a point (`message`, with `note`, at the one that does).
    fn parameters_then_argument(
        &self,
        args: &[Expr],
        what: &str,
        message: &str,
        note: &str,
    ) -> Result<Vec<Term>> {
        let mut lowered = Vec::with_capacity(args.len());
        for (k, a) in args.iter().enumerate() {
            self.scalar_argument(a, what)?;
            let t = self.expr(a)?;
            if k + 1 < args.len() && t.mentions_any_point() {
                return Err(self
                    .err(ErrorKind::Syntax, a.span, message.to_string())
                    .with_label("depends on a point")
                    .with_note(note.to_string()));
            }
            lowered.push(t);
        }
        Ok(lowered)
    }

    /// `f_bulk(Δ; ξ)` or `f_bdy(Δ̂; ξ)`, and their derivatives in ξ.
    fn block(&self, c: &Call, span: Span) -> Result<Term> {
        let name = &c.name.text;
        let (what, dim) = if name == BULK_BLOCK {
            ("the bulk-channel block", "Δ")
        } else {
            ("the boundary-channel block", "Δ̂")
        };
        let form = format!("{what} is written `{name}({dim}; ξ)`, with the exchanged dimension before `;` and the cross-ratio after it (docs/conventions.md §9); primes differentiate in ξ");
        if c.orders.is_some() || c.args.len() != 2 || c.separators != [';'] {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    format!("{what} takes a dimension and the cross-ratio, separated by `;`"),
                )
                .with_label(format!("not `{name}({dim}; ξ)`"))
                .with_note(form));
        }
        if c.primes > MAX_ORDER {
            return Err(self.too_many_derivatives(c.name.span));
        }
        self.scalar_argument(&c.args[0], "a dimension")?;
        self.scalar_argument(&c.args[1], "the cross-ratio")?;
        let delta = self.expr(&c.args[0])?;
        if delta.mentions_any_point() {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    c.args[0].span,
                    "the dimension of a block cannot depend on points",
                )
                .with_label("depends on a point")
                .with_note(form));
        }
        let xi = self.expr(&c.args[1])?;
        let var = self.fresh_symbol("xi");
        let body = if name == BULK_BLOCK {
            self.bulk_block(&delta, &Term::Sym(var.clone()))
        } else {
            self.boundary_block(&delta, &Term::Sym(var.clone()))?
        };
        let body = self.differentiate(body, &var, c.primes, c.name.span)?;
        Ok(diff::substitute(&body, &var, &xi))
    }

    /// `f_bdy3(Δ̂, δ̂; χ)`: the boundary-channel block of ⟨O Ô1 Ô2⟩,
    /// χ^(Δ̂/2) ₂F₁((Δ̂ + δ̂)/2, (Δ̂ - δ̂)/2; Δ̂ + (3 - d)/2; χ) with
    /// δ̂ = Δ̂1 - Δ̂2 (docs/conventions.md §15); primes differentiate in χ.
    fn three_point_block(&self, c: &Call, span: Span) -> Result<Term> {
        let form = "the boundary-channel block of a bulk–boundary–boundary function is written `f_bdy3(Dhat, dhat12; chi)`: the exchanged dimension and the difference Δ̂1 - Δ̂2 of the two boundary dimensions, `;`, then the cross-ratio χ (docs/conventions.md §15); primes differentiate in χ";
        if c.orders.is_some() || c.args.len() != 3 || c.separators != [',', ';'] {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    "the bulk–boundary–boundary block takes a dimension and a difference of dimensions, `;`, then the cross-ratio",
                )
                .with_label("not `f_bdy3(Dhat, dhat12; chi)`")
                .with_note(form));
        }
        if c.primes > MAX_ORDER {
            return Err(self.too_many_derivatives(c.name.span));
        }
        let lowered = self.parameters_then_argument(
            c.args,
            "an argument of the block",
            "the dimensions of a block cannot depend on points",
            form,
        )?;
        let [delta, delta12, chi] = <[Term; 3]>::try_from(lowered)
            .map_err(|_| Error::new(ErrorKind::Syntax, "the block takes three arguments"))?;
        let var = self.fresh_symbol("chi");
        let x = Term::Sym(var.clone());
        let half = |t: Term| Term::Mul(vec![Term::Num(ratio(1, 2)), t]);
        let d = self.ctx.dim();
        let a = half(Term::Add(vec![delta.clone(), delta12.clone()]));
        let b = half(Term::Add(vec![delta.clone(), delta12.negated()]));
        let cc = Term::Add(vec![
            delta.clone(),
            Term::Num(ratio(3, 2)),
            half(d).negated(),
        ]);
        let body = Term::Mul(vec![
            Term::Pow(Box::new(x.clone()), Box::new(half(delta))),
            Term::hyp2f1(0, a, b, cc, x),
        ]);
        let body = self.differentiate(body, &var, c.primes, c.name.span)?;
        Ok(diff::substitute(&body, &var, &chi))
    }

    /// `g_block(Δ, ℓ; z, z̄)`: the s-channel block of four identical scalars
    /// in d = 2 or d = 4 (docs/conventions.md §14), with
    /// k_β(x) = x^(β/2) ₂F₁(β/2, β/2; β; x):
    ///
    ///   d = 2: [k_{Δ+ℓ}(z) k_{Δ-ℓ}(z̄) + k_{Δ-ℓ}(z) k_{Δ+ℓ}(z̄)]/(1 + δ_{ℓ0}),
    ///   d = 4: z z̄/(z - z̄) [k_{Δ+ℓ}(z) k_{Δ-ℓ-2}(z̄) - k_{Δ-ℓ-2}(z) k_{Δ+ℓ}(z̄)].
    ///
    /// ℓ is a whole number ≥ 0 or a symbol; a symbolic ℓ in d = 2 stands
    /// for ℓ ≥ 1 (no 1/2).
    fn four_point_block(&self, c: &Call, span: Span) -> Result<Term> {
        let form = "the four-point block is written `g_block(Delta, l; z, zb)`, or `g_block(Delta, l, D12, D34; z, zb)` with D12 = Δ1 - Δ2, D34 = Δ3 - Δ4: the exchanged dimension and spin, `;`, then z and z̄ (u = z z̄, v = (1 - z)(1 - z̄); docs/conventions.md §14); to differentiate it, name it with `let g(z, zb) = g_block(Delta, l; z, zb)` and write `g[1,0](z, zb)`";
        if c.orders.is_some() || c.primes > 0 {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    c.name.span,
                    "the four-point block takes no primes or derivative counts",
                )
                .with_label("derivatives of g_block")
                .with_note(form));
        }
        // `g_block(Δ, ℓ; z, z̄)`, or `g_block(Δ, ℓ, Δ12, Δ34; z, z̄)` for
        // unequal external dimensions.
        let mixed = c.args.len() == 6 && c.separators == [',', ',', ',', ';', ','];
        if !mixed && (c.args.len() != 4 || c.separators != [',', ';', ',']) {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    "the four-point block takes a dimension and a spin (and Δ12, Δ34), `;`, then z and z̄",
                )
                .with_label("not `g_block(Delta, l; z, zb)`")
                .with_note(form));
        }
        let d = match self.ctx.dim() {
            Term::Num(n) if n == ratio(2, 1) => 2,
            Term::Num(n) if n == ratio(4, 1) => 4,
            _ => {
                return Err(self
                    .err(
                        ErrorKind::Unsupported,
                        c.name.span,
                        "four-point blocks have closed forms in d = 2 and d = 4 only",
                    )
                    .with_label("in this file's dimension")
                    .with_note("declare `dimension 2` or `dimension 4`"))
            }
        };
        let mut lowered = Vec::with_capacity(6);
        for (k, a) in c.args.iter().enumerate() {
            self.scalar_argument(a, "an argument of the four-point block")?;
            let t = self.expr(a)?;
            if k + 2 < c.args.len() && t.mentions_any_point() {
                return Err(self
                    .err(
                        ErrorKind::Syntax,
                        a.span,
                        "the dimensions and spin of a block cannot depend on points",
                    )
                    .with_label("depends on a point")
                    .with_note(form));
            }
            lowered.push(t);
        }
        let spin = crate::normal::normalize(&self.ctx, &lowered[1]).unwrap_or(lowered[1].clone());
        let scalar_spin = match &spin {
            Term::Num(n) => {
                if !(n.is_integer() && *n >= ratio(0, 1)) {
                    return Err(self
                        .err(
                            ErrorKind::Syntax,
                            c.args[1].span,
                            "the spin of a four-point block is a whole number ≥ 0",
                        )
                        .with_label("not a whole number ≥ 0")
                        .with_note(form));
                }
                n.is_zero()
            }
            _ => false,
        };
        if !mixed {
            lowered.splice(2..2, [Term::int(0), Term::int(0)]);
        }
        let [delta, l, d12, d34, z, zb] = <[Term; 6]>::try_from(lowered).map_err(|_| {
            Error::new(
                ErrorKind::Syntax,
                "the four-point block takes four or six arguments",
            )
        })?;
        let half = |t: Term| Term::Mul(vec![Term::Num(ratio(1, 2)), t]);
        // k_β(x) = x^(β/2) ₂F₁(β/2 - Δ12/2, β/2 + Δ34/2; β; x) (Dolan &
        // Osborn 2001, hep-th/0011040, eqs. 2.10-2.11: a = -Δ12/2, b = Δ34/2).
        let k = |beta: Term, x: &Term| {
            let h = half(beta.clone());
            let a = Term::Add(vec![h.clone(), half(d12.clone().negated())]);
            let b = Term::Add(vec![h.clone(), half(d34.clone())]);
            Term::Mul(vec![
                Term::Pow(Box::new(x.clone()), Box::new(h)),
                Term::hyp2f1(0, a, b, beta, x.clone()),
            ])
        };
        let plus = Term::Add(vec![delta.clone(), l.clone()]);
        let minus = if d == 2 {
            Term::Add(vec![delta, l.negated()])
        } else {
            Term::Add(vec![delta, l.negated(), Term::int(-2)])
        };
        let first = Term::Mul(vec![k(plus.clone(), &z), k(minus.clone(), &zb)]);
        let second = Term::Mul(vec![k(minus, &z), k(plus, &zb)]);
        Ok(if d == 2 {
            let sum = Term::Add(vec![first, second]);
            if scalar_spin {
                Term::Mul(vec![Term::Num(ratio(1, 2)), sum])
            } else {
                sum
            }
        } else {
            Term::Mul(vec![
                z.clone(),
                zb.clone(),
                Term::Pow(
                    Box::new(Term::Add(vec![z, zb.negated()])),
                    Box::new(Term::int(-1)),
                ),
                Term::Add(vec![first, second.negated()]),
            ])
        })
    }

    /// ξ^(Δ/2) ₂F₁(Δ/2, Δ/2; Δ + 1 - d/2; -ξ) (docs/conventions.md §9).
    fn bulk_block(&self, delta: &Term, xi: &Term) -> Term {
        let half = |t: Term| Term::Mul(vec![Term::Num(ratio(1, 2)), t]);
        let d = self.ctx.dim();
        let h = half(delta.clone());
        Term::Mul(vec![
            Term::Pow(Box::new(xi.clone()), Box::new(h.clone())),
            Term::hyp2f1(
                0,
                h.clone(),
                h,
                Term::Add(vec![delta.clone(), Term::one(), half(d).negated()]),
                xi.clone().negated(),
            ),
        ])
    }

    /// ξ^(-Δ̂) ₂F₁(Δ̂, Δ̂ + 1 - d/2; 2Δ̂ + 2 - d; -1/ξ), and at Δ̂ = d/2 - 1
    /// (both b and c zero, c = 2b) its limit along Δ̂,
    /// ξ^(-Δ̂) (1 + (ξ/(1 + ξ))^Δ̂)/2 (docs/conventions.md §9).
    fn boundary_block(&self, delta: &Term, xi: &Term) -> Result<Term> {
        let d = self.ctx.dim();
        let b = Term::Add(vec![
            delta.clone(),
            Term::one(),
            Term::Mul(vec![Term::Num(ratio(-1, 2)), d.clone()]),
        ]);
        let prefactor = Term::Pow(Box::new(xi.clone()), Box::new(delta.clone().negated()));
        let at_bound = crate::normal::normalize(&self.ctx, &b).is_ok_and(|t| t.is_zero());
        if at_bound {
            let ratio_term = Term::Mul(vec![
                xi.clone(),
                Term::Pow(
                    Box::new(Term::Add(vec![Term::one(), xi.clone()])),
                    Box::new(Term::int(-1)),
                ),
            ]);
            return Ok(Term::Mul(vec![
                Term::Num(ratio(1, 2)),
                prefactor,
                Term::Add(vec![
                    Term::one(),
                    Term::Pow(Box::new(ratio_term), Box::new(delta.clone())),
                ]),
            ]));
        }
        let c = Term::Mul(vec![Term::int(2), b.clone()]);
        let z = Term::Pow(Box::new(xi.clone()), Box::new(Term::int(-1))).negated();
        Ok(Term::Mul(vec![
            prefactor,
            Term::hyp2f1(0, delta.clone(), b, c, z),
        ]))
    }

    /// `f(u)`, `f''(u)`, `g[1,0](u, v)` for `let f(t) = …`.
    fn defined_call(&self, c: &Call, params: &[Name], body: &Expr, span: Span) -> Result<Term> {
        let name = &c.name.text;
        if c.args.len() != params.len() || c.separators.contains(&';') {
            let count = |n: usize| format!("{n} argument{}", if n == 1 { "" } else { "s" });
            let message = if c.args.len() != params.len() {
                format!(
                    "`{name}` takes {}, found {}",
                    count(params.len()),
                    count(c.args.len())
                )
            } else {
                format!("the arguments of `{name}` are separated by `,`, not `;`")
            };
            return Err(self
                .err(ErrorKind::Syntax, span, message)
                .with_label("not as defined")
                .with_note(format!(
                    "`let {name}({}) = …`",
                    params
                        .iter()
                        .map(|p| p.text.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                )));
        }
        let orders = self.orders(c, params.len())?;
        let mut args = Vec::with_capacity(params.len());
        for a in c.args {
            self.scalar_argument(a, "an argument of a defined function")?;
            args.push(self.expr(a)?);
        }
        let vars: Vec<String> = params.iter().map(|p| self.fresh_symbol(&p.text)).collect();
        let lowered = self.with_bound(params, &vars, || self.expr(&self.fresh_components(body)));
        let mut t = lowered.map_err(|e| {
            if e.kind == ErrorKind::Limit {
                e.with_span(&self.source, c.name.span)
                    .with_label(format!("`{name}` is substituted here"))
            } else {
                e
            }
        })?;
        for (var, k) in vars.iter().zip(&orders) {
            t = self.differentiate(t, var, *k, c.name.span)?;
        }
        for (var, arg) in vars.iter().zip(&args) {
            t = diff::substitute(&t, var, arg);
        }
        Ok(t)
    }

    /// `let NAME = EXPR` and `let NAME(t, …) = EXPR`: checks the expression
    /// once, and keeps it to be lowered again where the name is used.
    pub(super) fn declare_let(&mut self, name: &Name, params: &[Name], expr: &Expr) -> Result<()> {
        // Components (`x1[0]`) become contractions here; a statement that
        // uses the name decides whether it may hold them.
        let expr = &self.numeric_components(expr)?;
        self.index_free(
            expr,
            "a named expression",
            "a `let` names an expression without free indices; contract the index (e.g. `x1[mu] x1[mu]`) or write the tensor out where it is used",
        )?;
        for (k, p) in params.iter().enumerate() {
            if params[..k].iter().any(|q| q.text == p.text) {
                return Err(self
                    .err(
                        ErrorKind::Name,
                        p.span,
                        format!("the parameter `{}` is named twice", p.text),
                    )
                    .with_label("named again"));
            }
            if p.text == crate::context::DIMENSION {
                return Err(self
                    .err(
                        ErrorKind::Name,
                        p.span,
                        "`d` is the dimension and cannot name a parameter",
                    )
                    .with_label("reserved name"));
            }
        }
        *self.scope.defining.borrow_mut() = Some(name.text.clone());
        let vars: Vec<String> = params.iter().map(|p| self.fresh_symbol(&p.text)).collect();
        let was = self.in_numeric.replace(true);
        let lowered = self.with_bound(params, &vars, || self.expr(expr));
        self.in_numeric.set(was);
        *self.scope.defining.borrow_mut() = None;
        lowered?;
        self.new_name(name, super::Declared::Let)?;
        self.lets
            .insert(name.text.clone(), (params.to_vec(), expr.clone()));
        Ok(())
    }

    /// The symbol a parameter of the function being lowered stands for.
    pub(super) fn bound_parameter(&self, name: &str) -> Option<Term> {
        self.bound
            .borrow()
            .iter()
            .rev()
            .find(|(n, _)| n == name)
            .map(|(_, t)| t.clone())
    }

    /// Runs `f` with `params` standing for the symbols `vars`.
    fn with_bound<T>(&self, params: &[Name], vars: &[String], f: impl FnOnce() -> T) -> T {
        let depth = self.bound.borrow().len();
        self.bound.borrow_mut().extend(
            params
                .iter()
                .zip(vars)
                .map(|(p, v)| (p.text.clone(), Term::Sym(v.clone()))),
        );
        let out = f();
        self.bound.borrow_mut().truncate(depth);
        out
    }

    /// A symbol no input can spell (it starts with a control character),
    /// for one parameter of one call.
    fn fresh_symbol(&self, name: &str) -> String {
        let n = self.fresh.get();
        self.fresh.set(n + 1);
        format!("\u{1}{name}#{n}")
    }

    /// `k` derivatives of `t` in the symbol `var`, normalised on the way
    /// so that repeated derivatives do not grow without bound.
    fn differentiate(&self, mut t: Term, var: &str, k: u32, at: Span) -> Result<Term> {
        for _ in 0..k {
            t = diff::derivative(&t, var).map_err(|e| {
                self.err(
                    ErrorKind::Unsupported,
                    at,
                    format!("cannot differentiate {}", e.0),
                )
                .with_label("differentiated here")
            })?;
        }
        Ok(t)
    }

    /// An error if `e` carries a free index: `what` must be a scalar.
    fn scalar_argument(&self, e: &Expr, what: &str) -> Result<()> {
        self.index_free(
            e,
            what,
            "arguments of functions are scalars; contract the index (e.g. `x1[mu] x1[mu]`)",
        )
    }
}

/// Most derivatives of one function in one call.
const MAX_ORDER: u32 = 64;

fn ratio(p: i64, q: i64) -> num_rational::BigRational {
    num_rational::BigRational::new(p.into(), q.into())
}
