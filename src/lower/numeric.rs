//! Lowering of the numeric set-up: `model`, `coefficient` and `values`.
//!
//! Nothing here computes a number; it checks the statements against the
//! declarations and records them for `numeric::session`.

use std::collections::BTreeMap;

use num_rational::BigRational;

use super::{constant_value, Lowerer};
use crate::context::{DISPLACEMENT, STRESS_TENSOR};
use crate::diagnostic::{ErrorKind, Result};
use crate::syntax::ast::{Expr, ModelSpec, Name, Span};
use crate::term::Term;

/// The numeric set-up of a file.
#[derive(Clone, Debug, Default)]
pub struct NumericSpec {
    /// The model and where it was declared.
    pub model: Option<(ModelChoice, Span)>,
    /// Coefficients of the conformal model: operator names → value.
    pub coefficients: Vec<(Vec<String>, Term)>,
    /// Numeric values of parameters (one entry for scalars, d or d² for
    /// vectors and tensors, row-major).
    pub values: BTreeMap<String, ValueSpec>,
    /// `sample N seed S`: N sets of seeded random positions.
    pub sample: Option<(usize, u64)>,
    /// `tolerance T`: the relative accuracy asked of quadrature.
    pub tolerance: Option<f64>,
}

/// The range a `tolerance` may take: below it rounding dominates, above it
/// a quadrature result says little.
pub const TOLERANCE_RANGE: (f64, f64) = (1e-14, 1e-2);

/// A checked model choice.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ModelChoice {
    Conformal {
        y_convention: bool,
    },
    FreeScalar {
        /// `Some(true)` Dirichlet, `Some(false)` Neumann, `None` no wall
        /// (or, with `family`, the side the coupling starts from).
        dirichlet: Option<bool>,
        /// The complex scalar φ, φ̄ (no wall), with its U(1) current.
        complex: bool,
        unimproved: bool,
        /// Operator name → composite name (`phi`, `phi2`, `boundary-phi`, …).
        fields: Vec<(String, String)>,
        /// A wall with a reflection coefficient other than ±1.
        family: Option<Family>,
    },
    /// Generalised free fields; `Some(true)` Dirichlet-like image sign.
    Gff {
        dirichlet: Option<bool>,
    },
}

/// The reflecting wall of the free scalar (docs/conventions.md §11).
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Family {
    /// `reflection r`: ρ given (a number in [-1, 1] or an expression in
    /// the parameters); no χ.
    Reflection(Term),
    /// `neumann coupling g` (`dirichlet: false`) or `dirichlet coupling g`:
    /// the wall coupled with strength g to a boundary generalised free
    /// field χ of the marginal dimension; ρ follows from g.
    Coupling { dirichlet: bool, g: Term },
}

/// Exact numeric components of a parameter's value.
pub type ValueSpec = Vec<BigRational>;

impl Lowerer {
    pub(super) fn declare_model(&mut self, spec: &ModelSpec, span: Span) -> Result<()> {
        if self.numeric.model.is_some() {
            return Err(self
                .err(ErrorKind::Name, span, "a file has one model")
                .with_label("a second `model`"));
        }
        let choice = match spec {
            ModelSpec::Conformal { y_convention } => ModelChoice::Conformal {
                y_convention: *y_convention,
            },
            ModelSpec::Gff { wall } => ModelChoice::Gff {
                dirichlet: wall.as_deref().map(|w| w == "dirichlet"),
            },
            ModelSpec::FreeScalar {
                wall,
                complex,
                unimproved,
                fields,
                reflection,
                coupling,
            } => {
                let dirichlet = wall.as_deref().map(|w| w == "dirichlet");
                let family = match (reflection, coupling) {
                    (Some(r), _) => Some(Family::Reflection(self.reflection_value(r)?)),
                    (None, Some(g)) => Some(Family::Coupling {
                        dirichlet: dirichlet == Some(true),
                        g: self.model_number(g, "the coupling g")?,
                    }),
                    (None, None) => None,
                };
                if (dirichlet.is_some() || family.is_some()) != self.ctx.has_halfspace() {
                    let message = if dirichlet.is_some() || family.is_some() {
                        "a wall needs `halfspace y >= 0`"
                    } else {
                        "with a half-space, say which wall: `model free-scalar dirichlet`, `neumann` or `reflection r`"
                    };
                    return Err(self
                        .err(ErrorKind::Placement, span, message)
                        .with_label("model"));
                }
                if *complex && family.is_some() {
                    return Err(self
                        .err(
                            ErrorKind::Placement,
                            span,
                            "the complex free scalar is modelled without a wall or with a \
                             Neumann or Dirichlet wall",
                        )
                        .with_label("model")
                        .with_note(
                            "write `model free-scalar complex neumann` or `complex dirichlet`",
                        ));
                }
                let mut out = Vec::new();
                for (name, composite) in fields {
                    self.need_operator(name)?;
                    let complex_only = matches!(
                        composite.as_str(),
                        "phibar" | "current" | "boundary-current"
                    );
                    let real_only = (composite.starts_with("boundary-")
                        && !matches!(composite.as_str(), "boundary-tn" | "boundary-current"))
                        || composite == "chi";
                    if (complex_only && !*complex) || (real_only && *complex) {
                        return Err(self
                            .err(
                                ErrorKind::Placement,
                                name.span,
                                if complex_only {
                                    format!("`{composite}` belongs to the complex scalar")
                                } else {
                                    format!("`{composite}` belongs to the real scalar next to a wall")
                                },
                            )
                            .with_label("not a composite of this model")
                            .with_note("`model free-scalar complex with P = phi, Pb = phibar, J = current` maps the complex scalar's fields and current"));
                    }
                    if composite == "stress"
                        && name.text != STRESS_TENSOR
                        && !self
                            .ctx
                            .operator(&name.text)
                            .is_some_and(|o| o.rank == 2 && !o.boundary)
                    {
                        return Err(self
                            .err(
                                ErrorKind::Placement,
                                name.span,
                                format!(
                                    "`{}` stands for the stress tensor, which is a bulk tensor of spin 2",
                                    name.text
                                ),
                            )
                            .with_label("not declared as a bulk spin-2 tensor")
                            .with_note(format!(
                                "declare it `tensor {} dim d, spin 2` (with the file's dimension for d)",
                                name.text
                            )));
                    }
                    if composite == "chi" && !matches!(family, Some(Family::Coupling { .. })) {
                        return Err(self
                            .err(
                                ErrorKind::Placement,
                                name.span,
                                format!("`{}` stands for χ, and this model has no χ", name.text),
                            )
                            .with_label("χ needs a coupling")
                            .with_note(
                                "χ is the boundary field the wall is coupled to: write \
                                 `model free-scalar neumann coupling g` (χ of dimension d/2) or \
                                 `dirichlet coupling g` (χ of dimension d/2 - 1)",
                            ));
                    }
                    if matches!(
                        composite.as_str(),
                        "chi" | "boundary-tn" | "boundary-current"
                    ) && !self.ctx.operator(&name.text).is_some_and(|o| o.boundary)
                    {
                        return Err(self
                            .err(
                                ErrorKind::Placement,
                                name.span,
                                format!(
                                    "`{}` stands for a boundary operator ({composite}) and is declared in the bulk",
                                    name.text
                                ),
                            )
                            .with_label("declared without `boundary`")
                            .with_note(match composite.as_str() {
                                "chi" => format!("declare it `boundary scalar {} dim …`", name.text),
                                "boundary-current" => {
                                    format!("declare it `boundary vector {} dim d - 1`", name.text)
                                }
                                _ => format!("declare it `boundary vector {} dim d`", name.text),
                            }));
                    }
                    let chi_side = match &family {
                        Some(Family::Coupling { dirichlet, .. }) => Some(*dirichlet),
                        _ => None,
                    };
                    self.same_dimension(name, composite, chi_side)?;
                    out.push((name.text.clone(), composite.clone()));
                }
                ModelChoice::FreeScalar {
                    dirichlet,
                    complex: *complex,
                    unimproved: *unimproved,
                    fields: out,
                    family,
                }
            }
        };
        if let ModelChoice::Gff { dirichlet } = &choice {
            if dirichlet.is_some() != self.ctx.has_halfspace() {
                let message = if dirichlet.is_some() {
                    "a wall needs `halfspace y >= 0`"
                } else {
                    "with a half-space, say which image sign: `model gff dirichlet` or `neumann`"
                };
                return Err(self
                    .err(ErrorKind::Placement, span, message)
                    .with_label("model"));
            }
        }
        self.numeric.model = Some((choice, span));
        Ok(())
    }

    /// A declared dimension that the free scalar's composite contradicts is
    /// an error: `scalar P dim 2` cannot stand for φ² (dimension d - 2).
    /// Dimensions with parameters besides d are left to the values.
    fn same_dimension(
        &self,
        name: &Name,
        composite: &str,
        chi_dirichlet: Option<bool>,
    ) -> Result<()> {
        let d = self.ctx.dim();
        let half = |t: Term| Term::Mul(vec![Term::Num(BigRational::new(1.into(), 2.into())), t]);
        let expected = match composite {
            "phi" | "phibar" | "boundary-phi" => half(Term::Add(vec![d, Term::int(-2)])),
            "current" | "boundary-current" => Term::Add(vec![d, Term::int(-1)]),
            "stress" => d,
            "phi2" | "boundary-phi2" => Term::Add(vec![d, Term::int(-2)]),
            "boundary-dphi" => half(d),
            "boundary-tn" => d,
            "chi" if chi_dirichlet == Some(true) => half(Term::Add(vec![d, Term::int(-2)])),
            "chi" => half(d),
            _ => return Ok(()),
        };
        let Some(declared) = self.ctx.attribute(&name.text, "dim") else {
            return Ok(());
        };
        let difference = crate::normal::normalize(
            &self.ctx,
            &Term::Add(vec![declared.clone(), expected.clone().negated()]),
        )?;
        let only_d = |t: &Term| -> bool {
            let mut ok = true;
            let mut stack = vec![t];
            while let Some(t) = stack.pop() {
                match t {
                    Term::Num(_) => {}
                    Term::Sym(s) => ok &= s == crate::context::DIMENSION,
                    Term::Add(ts) | Term::Mul(ts) => stack.extend(ts),
                    Term::Pow(a, b) => {
                        stack.push(a);
                        stack.push(b);
                    }
                    _ => ok = false,
                }
            }
            ok
        };
        if difference.is_zero() || !only_d(&difference) {
            return Ok(());
        }
        let printer =
            crate::term::print::Printer::new(&self.ctx, crate::term::print::Style::Unicode);
        let expected = crate::normal::normalize(&self.ctx, &expected)?;
        Err(self
            .err(
                ErrorKind::Name,
                name.span,
                format!(
                    "`{}` is declared with dimension {}, but `{composite}` has dimension {}",
                    name.text,
                    printer.term(declared),
                    printer.term(&expected)
                ),
            )
            .with_label("stands for a composite of another dimension")
            .with_note(format!(
                "declare `{}` with `dim {}`, or map another composite",
                name.text,
                printer.term(&expected)
            )))
    }

    /// The value after `coupling`: a number or an expression in the
    /// parameters (no points, indices or correlators), so that `scan` can
    /// run over it.
    fn model_number(&self, e: &Expr, what: &str) -> Result<Term> {
        let t = self.expr(e)?;
        fn plain(t: &Term) -> bool {
            match t {
                Term::Num(_) | Term::Sym(_) => true,
                Term::Param(_, indices) => indices.is_empty(),
                Term::Add(ts) | Term::Mul(ts) => ts.iter().all(plain),
                Term::Pow(a, b) => plain(a) && plain(b),
                _ => false,
            }
        }
        if !plain(&t) {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    e.span,
                    format!("{what} is a number or an expression in the parameters"),
                )
                .with_label("depends on points or indices")
                .with_note("declare a parameter (`parameters g`) to scan over it"));
        }
        Ok(t)
    }

    /// The value after `reflection`: as [`Lowerer::model_number`], and a
    /// number must lie in [-1, 1].
    fn reflection_value(&self, e: &Expr) -> Result<Term> {
        let t = self.model_number(e, "the reflection coefficient")?;
        if let Some(r) = constant_value(e) {
            let one = BigRational::from_integer(1.into());
            if r > one || r < -one.clone() {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        e.span,
                        "the reflection coefficient runs over [-1, 1]",
                    )
                    .with_label("outside [-1, 1]")
                    .with_note(
                        "ρ = 1 is the Neumann wall, ρ = -1 the Dirichlet wall; |ρ| > 1 needs a \
                         boundary field of negative norm",
                    ));
            }
        }
        Ok(t)
    }

    pub(super) fn declare_coefficient(
        &mut self,
        names: &[Name],
        value: &Expr,
        span: Span,
    ) -> Result<()> {
        for name in names {
            self.need_operator(name)?;
        }
        if !(1..=3).contains(&names.len()) {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    "a coefficient names one, two or three operators",
                )
                .with_label("e.g. `coefficient <O O> = 1`"));
        }
        let value = self.expr(value)?;
        self.numeric
            .coefficients
            .push((names.iter().map(|n| n.text.clone()).collect(), value));
        Ok(())
    }

    pub(super) fn declare_values(&mut self, items: &[(Name, Vec<Expr>)]) -> Result<()> {
        for (name, exprs) in items {
            let known = self.ctx.parameters.contains(&name.text)
                || self.ctx.params.contains_key(&name.text)
                || name.text == crate::context::DIMENSION;
            if !known {
                let n = &name.text;
                let what = if self.ctx.operators.contains_key(n) {
                    Some("an operator")
                } else if self.ctx.points.iter().any(|p| &p.name == n) {
                    Some("a point (its coordinates are given with `place … at (…)`)")
                } else if self.ctx.functions.contains(n) {
                    Some("a function")
                } else if self.ctx.killing.contains_key(n) {
                    Some("a Killing vector (values go to its parameter)")
                } else {
                    None
                };
                let mut e = self
                    .err(
                        ErrorKind::Name,
                        name.span,
                        format!("`{n}` is not a parameter"),
                    )
                    .with_label("no such parameter");
                e = match what {
                    Some(what) => e.with_note(format!("`{n}` is declared as {what}")),
                    None if exprs.len() > 1 => e.with_note(format!(
                        "`{n}` is not declared; a vector of values belongs to the parameter of a \
                         Killing vector: declare `killing eps translation {n}` (or `special {n}`) first"
                    )),
                    None => e.with_note(format!(
                        "`{n}` is not declared: add `parameters {n}` before this line, or name it \
                         in an operator's dimension (`scalar O dim {n}`)"
                    )),
                };
                return Err(e);
            }
            let mut components = Vec::with_capacity(exprs.len());
            for e in exprs {
                let Some(v) = constant_value(e) else {
                    return Err(self
                        .err(ErrorKind::Syntax, e.span, "a value is a number")
                        .with_label("not a number"));
                };
                components.push(v);
            }
            if self
                .numeric
                .values
                .insert(name.text.clone(), components)
                .is_some()
            {
                return Err(self
                    .err(
                        ErrorKind::Name,
                        name.span,
                        format!("`{}` has two values", name.text),
                    )
                    .with_label("given again"));
            }
        }
        Ok(())
    }

    pub(super) fn declare_sample(&mut self, count: &Expr, seed: &Expr, span: Span) -> Result<()> {
        let whole = |e: &Expr, max: u64| {
            constant_value(e)
                .filter(|v| v.is_integer())
                .and_then(|v| num_traits::ToPrimitive::to_u64(&v.to_integer()))
                .filter(|v| *v <= max)
        };
        let Some(n) = whole(count, 1000).filter(|n| *n > 0) else {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    count.span,
                    "the number of samples is a whole number from 1 to 1000",
                )
                .with_label("not a sample count"));
        };
        let Some(s) = whole(seed, u64::MAX) else {
            return Err(self
                .err(ErrorKind::Syntax, seed.span, "a seed is a whole number")
                .with_label("not a seed"));
        };
        if self.numeric.sample.is_some() {
            return Err(self
                .err(ErrorKind::Name, span, "a file samples once")
                .with_label("a second `sample`"));
        }
        self.numeric.sample = Some((n as usize, s));
        Ok(())
    }

    pub(super) fn declare_tolerance(&mut self, value: &Expr, span: Span) -> Result<()> {
        let (lo, hi) = TOLERANCE_RANGE;
        let Some(t) = constant_value(value)
            .and_then(|v| num_traits::ToPrimitive::to_f64(&v))
            .filter(|t| (lo..=hi).contains(t))
        else {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    value.span,
                    format!("a tolerance is a number from {lo:e} to {hi:e}: the relative accuracy asked of quadrature"),
                )
                .with_label("not a tolerance"));
        };
        if self.numeric.tolerance.is_some() {
            return Err(self
                .err(ErrorKind::Name, span, "a file sets its tolerance once")
                .with_label("a second `tolerance`"));
        }
        self.numeric.tolerance = Some(t);
        Ok(())
    }

    fn need_operator(&self, name: &Name) -> Result<()> {
        if self.ctx.operator(&name.text).is_some()
            || name.text == STRESS_TENSOR
            || name.text == DISPLACEMENT
        {
            Ok(())
        } else {
            Err(self
                .err(
                    ErrorKind::Name,
                    name.span,
                    format!("`{}` is not a declared operator", name.text),
                )
                .with_label("not an operator"))
        }
    }
}
