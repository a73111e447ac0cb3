//! Lowering: a parsed `.ward` file becomes a [`Program`]: its declarations
//! ([`Context`]) and its statements as [`Term`]s.
//!
//! This is where every mistake a parser cannot see is caught, with its span:
//! undeclared or doubly declared names, operators in the wrong place (D at a
//! bulk point, a boundary operator without a boundary), unbalanced free
//! indices, an index used three times, rule syntax in a `.ward` file, and
//! division by a literal zero.

mod anomaly;
mod components;
mod explicit;
mod functions;
mod indices;
mod numeric;

pub use components::{unit_vector, unit_vector_component};
pub use numeric::{Family, ModelChoice, NumericSpec, ValueSpec};

use std::collections::{BTreeMap, BTreeSet};
use std::sync::Arc;

use num_rational::BigRational;
use num_traits::{Signed, Zero};

use crate::budget::{MAX_BITS, MAX_DEPTH, MAX_NODES};
use crate::context::{
    Context, IndexKind, OperatorDecl, PointDecl, DIMENSION, DISPLACEMENT, NORMAL, STRESS_TENSOR,
};
use crate::diagnostic::{Error, ErrorKind, Result, Source};
pub use crate::syntax::ast::Channel;
use crate::syntax::ast::{
    self, BinOp, BlockDims, Expr, ExprKind, Insertion, Name, OpKind, PointRef, Span, Stmt,
};
use crate::term::{Index, Op, Point, Term};

/// A lowered `.ward` file.
#[derive(Debug)]
pub struct Program {
    pub source: Arc<Source>,
    pub ctx: Arc<Context>,
    pub items: Vec<Item>,
    /// Rule files named by `rules "…"` statements, as written, with spans.
    pub rule_files: Vec<(String, Span)>,
    /// The model, coefficients and values for numeric statements.
    pub numeric: NumericSpec,
}

/// One statement that asks for work.
#[derive(Debug)]
pub struct Item {
    pub kind: ItemKind,
    pub span: Span,
    /// 1-based line of the statement.
    pub line: usize,
}

/// One step of a derivation: the expression, its line, and the names after
/// `by` with their spans.
#[derive(Clone, Debug)]
pub struct Step {
    pub expr: Term,
    pub line: usize,
    pub cited: Vec<(String, Span)>,
}

#[derive(Debug)]
pub enum ItemKind {
    /// `simplify E [expect R]`; `expect_span` is where R is written, for
    /// `test --accept` to rewrite it.
    Simplify {
        expr: Term,
        expect: Option<Term>,
        expect_span: Option<Span>,
    },
    /// `claim L = R`; `slip`: marked as a slip, expected to be refuted.
    Claim { lhs: Term, rhs: Term, slip: bool },
    /// `evaluate E`: numeric values in the file's model, one per value of
    /// the free indices.
    Evaluate { expr: Term, free: Vec<String> },
    /// `perturb ⟨X⟩ by g O… on boundary z… to order N`: conformal
    /// perturbation theory in g ∫ O over the wall (docs/conventions.md §17).
    Perturb {
        /// The correlator ⟨X⟩, bulk scalar insertions only.
        corr: Term,
        coupling: Term,
        /// The boundary operators whose product at one point is O.
        operators: Vec<String>,
        /// The integration points, one per order.
        points: Vec<Point>,
        order: usize,
        /// `expect order n = E` (`Some(n)`) or `expect total = E` (`None`).
        expects: Vec<(Option<usize>, Term)>,
    },
    /// `compare L = R`: both sides numerically.
    Compare {
        lhs: Term,
        rhs: Term,
        free: Vec<String>,
    },
    /// `flux ∂[i](x) { F } = R radius r`.
    Flux {
        index: Index,
        var: Point,
        body: Term,
        rhs: Term,
        radius: Term,
        free: Vec<String>,
    },
    /// `scan p from a to b steps n: L = R [into "name"]`.
    Scan {
        param: String,
        from: f64,
        to: f64,
        steps: usize,
        lhs: Term,
        rhs: Term,
        free: Vec<String>,
        /// File stem for the CSV and SVG output, as written.
        output: Option<String>,
    },
    /// `structures ⟨…⟩` / `decompose ⟨…⟩ in structures`: the tensor
    /// structures of a correlator, and with `fit` the model's correlator
    /// expanded in them.
    Structures {
        corr: Term,
        fit: bool,
        /// File stem for the CSV and SVG output, as written.
        output: Option<String>,
    },
    /// `decompose ⟨O(x1) O(x2)⟩ in CHANNEL blocks …`: the two-point
    /// function expanded in the blocks of one channel.
    Decompose {
        corr: Term,
        channel: Channel,
        dims: Dims,
        /// File stem for the CSV and SVG output, as written.
        output: Option<String>,
    },
    /// `derivation NAME …`: each step with its line and the names of what
    /// justifies it.
    Derivation {
        name: String,
        start: Term,
        steps: Vec<Step>,
        /// Free indices shared by every step, for numeric checks.
        free: Vec<String>,
        /// Marked `slip`: some step is expected to be refuted.
        slip: bool,
    },
    /// `solve a from L = R`.
    Solve {
        unknown: String,
        lhs: Term,
        rhs: Term,
        free: Vec<String>,
    },
    /// `classify eps`: ε[n] on the boundary, zero for a preserved generator.
    Classify {
        name: String,
        family: &'static str,
        normal_component: Term,
    },
}

/// Lowers a parsed file.
pub fn lower(source: &Arc<Source>, file: &ast::File) -> Result<Program> {
    let mut lowerer = Lowerer {
        source: source.clone(),
        ctx: Context::default(),
        declared: BTreeMap::new(),
        lets: BTreeMap::new(),
        bound: Default::default(),
        arities: Default::default(),
        fresh: std::cell::Cell::new(0),
        in_numeric: std::cell::Cell::new(false),
        depth: std::cell::Cell::new(0),
        nodes: std::cell::Cell::new(0),
        numeric: NumericSpec::default(),
        scope: explicit::Scope::new(file),
        cross_ratios: Default::default(),
    };
    lowerer.ctx.add_builtins();
    lowerer.collect_indices(file);
    let mut items = Vec::new();
    let mut rule_files = Vec::new();
    let mut seen_expression = false;
    for stmt in &file.stmts {
        lowerer.nodes.set(0);
        lowerer.in_numeric.set(matches!(
            stmt,
            Stmt::Evaluate { .. }
                | Stmt::Solve { .. }
                | Stmt::Scan { .. }
                | Stmt::Compare { .. }
                | Stmt::Perturb { .. }
        ));
        match stmt {
            Stmt::Simplify { expr, expect, span } => {
                let expect_expr = expect;
                seen_expression = true;
                let profile = lowerer.free_indices(expr)?;
                let lowered = lowerer.expr(expr)?;
                let expect = match expect {
                    Some(e) => {
                        lowerer.same_free_indices(
                            &profile,
                            e,
                            ("the expression", "the expected result"),
                        )?;
                        Some(lowerer.expr(e)?)
                    }
                    None => None,
                };
                items.push(Item {
                    kind: ItemKind::Simplify {
                        expr: lowered,
                        expect,
                        expect_span: expect_expr.as_ref().map(|e| e.span),
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Claim {
                lhs,
                rhs,
                slip,
                span,
            } => {
                seen_expression = true;
                // `L = 0` and `0 = R` hold for tensors of any index structure.
                if !is_zero(lhs) {
                    let profile = lowerer.free_indices(lhs)?;
                    lowerer.same_free_indices(
                        &profile,
                        rhs,
                        ("the left side", "the right side"),
                    )?;
                }
                items.push(Item {
                    kind: ItemKind::Claim {
                        lhs: lowerer.expr(lhs)?,
                        rhs: lowerer.expr(rhs)?,
                        slip: *slip,
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Rules { path, span } => rule_files.push((path.clone(), *span)),
            Stmt::Evaluate { expr, span } => {
                seen_expression = true;
                let expr = &lowerer.numeric_components(expr)?;
                let free = lowerer.free_indices(expr)?.into_iter().collect();
                items.push(Item {
                    kind: ItemKind::Evaluate {
                        expr: lowerer.expr(expr)?,
                        free,
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Solve {
                unknown,
                lhs,
                rhs,
                span,
            } => {
                seen_expression = true;
                if !lowerer.ctx.parameters.contains(&unknown.text) {
                    return Err(lowerer
                        .err(ErrorKind::Name, unknown.span, format!("`{}` is not a parameter", unknown.text))
                        .with_label("cannot be solved for")
                        .with_note("solve for a scalar parameter, e.g. `parameters a` and `coefficient <T O O> = a`"));
                }
                let (lhs, rhs) = (
                    &lowerer.numeric_components(lhs)?,
                    &lowerer.numeric_components(rhs)?,
                );
                let profile = lowerer.free_indices(lhs)?;
                lowerer.same_free_indices(&profile, rhs, ("the left side", "the right side"))?;
                items.push(Item {
                    kind: ItemKind::Solve {
                        unknown: unknown.text.clone(),
                        lhs: lowerer.expr(lhs)?,
                        rhs: lowerer.expr(rhs)?,
                        free: profile.into_iter().collect(),
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Flux {
                lhs,
                rhs,
                radius,
                span,
            } => {
                seen_expression = true;
                let profile = lowerer.free_indices(lhs)?;
                lowerer.same_free_indices(&profile, rhs, ("the left side", "the right side"))?;
                let Term::Der(index, var, body) = lowerer.expr(lhs)? else {
                    return Err(lowerer
                        .err(
                            ErrorKind::Syntax,
                            lhs.span,
                            "`flux` checks a divergence: the left side is `∂[mu](x) { … }`",
                        )
                        .with_label("not a derivative"));
                };
                if lowerer.ctx.is_boundary_point(&var) {
                    return Err(lowerer
                        .err(
                            ErrorKind::Placement,
                            lhs.span,
                            "the divergence is taken at a bulk point",
                        )
                        .with_label("a boundary point"));
                }
                items.push(Item {
                    kind: ItemKind::Flux {
                        index,
                        var,
                        body: *body,
                        rhs: lowerer.expr(rhs)?,
                        radius: lowerer.expr(radius)?,
                        free: profile.into_iter().collect(),
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Scan {
                param,
                from,
                to,
                steps,
                lhs,
                rhs,
                output,
                span,
            } => {
                seen_expression = true;
                if !lowerer.ctx.parameters.contains(&param.text) {
                    return Err(lowerer
                        .err(
                            ErrorKind::Name,
                            param.span,
                            format!("`{}` is not a parameter", param.text),
                        )
                        .with_label("cannot be scanned")
                        .with_note(
                            "scan a scalar parameter, e.g. `scan Delta from 1 to 2 steps 11: …`",
                        ));
                }
                let number = |e: &Expr| -> Result<f64> {
                    constant_value(e)
                        .and_then(|v| num_traits::ToPrimitive::to_f64(&v))
                        .ok_or_else(|| {
                            lowerer
                                .err(
                                    ErrorKind::Syntax,
                                    e.span,
                                    "a scan range is given by numbers",
                                )
                                .with_label("not a number")
                        })
                };
                let (a, b) = (number(from)?, number(to)?);
                let n = constant_value(steps)
                    .filter(|v| v.is_integer())
                    .and_then(|v| num_traits::ToPrimitive::to_usize(&v.to_integer()))
                    .filter(|n| (2..=10_000).contains(n))
                    .ok_or_else(|| {
                        lowerer
                            .err(
                                ErrorKind::Syntax,
                                steps.span,
                                "the number of steps is a whole number from 2 to 10000",
                            )
                            .with_label("not a step count")
                    })?;
                if let Some((name, span)) = output {
                    check_output_name(&lowerer, name, *span)?;
                }
                let (lhs, rhs) = (
                    &lowerer.numeric_components(lhs)?,
                    &lowerer.numeric_components(rhs)?,
                );
                let profile = lowerer.free_indices(lhs)?;
                lowerer.same_free_indices(&profile, rhs, ("the left side", "the right side"))?;
                items.push(Item {
                    kind: ItemKind::Scan {
                        param: param.text.clone(),
                        from: a,
                        to: b,
                        steps: n,
                        lhs: lowerer.expr(lhs)?,
                        rhs: lowerer.expr(rhs)?,
                        free: profile.into_iter().collect(),
                        output: output.as_ref().map(|(n, _)| n.clone()),
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Structures {
                corr,
                fit,
                output,
                span,
            } => {
                seen_expression = true;
                let lowered = lowerer.expr(corr)?;
                let fine = match &lowered {
                    Term::Corr(ops) => ops.iter().all(|o| {
                        let mut names: Vec<&crate::term::Index> = o.indices.iter().collect();
                        let n = names.len();
                        names.sort();
                        names.dedup();
                        names.len() == n
                            && o.indices
                                .iter()
                                .all(|i| matches!(i, crate::term::Index::Named(_)))
                    }),
                    _ => false,
                };
                if !fine {
                    return Err(lowerer
                        .err(
                            ErrorKind::Syntax,
                            corr.span,
                            "structures are listed for a correlator with distinct named indices, e.g. `<T[mu,nu](x) D(s1) D(s2)>`",
                        )
                        .with_label("not a correlator with free indices"));
                }
                if let Some((name, span)) = output {
                    check_output_name(&lowerer, name, *span)?;
                }
                items.push(Item {
                    kind: ItemKind::Structures {
                        corr: lowered,
                        fit: *fit,
                        output: output.as_ref().map(|(n, _)| n.clone()),
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Decompose {
                corr,
                channel,
                dims,
                output,
                span,
            } if *channel == Channel::SChannel => {
                seen_expression = true;
                let BlockDims::TwistSpin(towers, externals) = dims else {
                    return Err(lowerer.err(
                        ErrorKind::Syntax,
                        *span,
                        "the s-channel takes a tower of twists and one of spins",
                    ));
                };
                let lowered = lowerer.four_point_function(corr)?;
                let tower = |t: &(
                    crate::syntax::ast::Expr,
                    crate::syntax::ast::Expr,
                    Option<crate::syntax::ast::Expr>,
                )|
                 -> Result<(Term, Term, Option<Term>)> {
                    Ok((
                        lowerer.scalar_parameter_expr(&t.0)?,
                        lowerer.scalar_parameter_expr(&t.1)?,
                        t.2.as_ref()
                            .map(|s| lowerer.scalar_parameter_expr(s))
                            .transpose()?,
                    ))
                };
                let dims = Dims::TwistSpin {
                    twist: Box::new(tower(&towers[0])?),
                    spin: Box::new(tower(&towers[1])?),
                    externals: match externals {
                        Some(e) => Some(Box::new((
                            lowerer.scalar_parameter_expr(&e.0)?,
                            lowerer.scalar_parameter_expr(&e.1)?,
                        ))),
                        None => None,
                    },
                };
                if let Some((name, span)) = output {
                    check_output_name(&lowerer, name, *span)?;
                }
                items.push(Item {
                    kind: ItemKind::Decompose {
                        corr: lowered,
                        channel: *channel,
                        dims,
                        output: output.as_ref().map(|(n, _)| n.clone()),
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Decompose {
                corr,
                channel,
                dims,
                output,
                span,
            } => {
                seen_expression = true;
                if !lowerer.ctx.has_halfspace() {
                    return Err(lowerer
                        .err(
                            ErrorKind::Syntax,
                            *span,
                            "block expansions are of two-point functions next to a wall",
                        )
                        .with_note("declare the wall: `halfspace y >= 0`"));
                }
                let lowered = lowerer.expr(corr)?;
                let two_bulk_scalars = match &lowered {
                    Term::Corr(ops) => {
                        ops.len() == 2
                            && ops.iter().all(|o| {
                                o.indices.is_empty() && !lowerer.ctx.is_boundary_point(&o.point)
                            })
                    }
                    _ => false,
                };
                // ⟨O(x) Ô1(s1) Ô2(s2)⟩: one bulk scalar first, then two
                // boundary scalars, in the boundary channel
                // (docs/conventions.md §15).
                let bulk_boundary_boundary = match &lowered {
                    Term::Corr(ops) => {
                        ops.len() == 3
                            && ops.iter().all(|o| o.indices.is_empty())
                            && ops
                                .iter()
                                .filter(|o| lowerer.ctx.is_boundary_point(&o.point))
                                .count()
                                == 2
                    }
                    _ => false,
                };
                if bulk_boundary_boundary && *channel != Channel::Boundary {
                    return Err(lowerer
                        .err(
                            ErrorKind::Syntax,
                            corr.span,
                            "a bulk–boundary–boundary function is expanded in the boundary channel only",
                        )
                        .with_label("three points")
                        .with_note("write `decompose <O(x) H1(s1) H2(s2)> in boundary blocks …`"));
                }
                if !two_bulk_scalars && !bulk_boundary_boundary {
                    return Err(lowerer
                        .err(
                            ErrorKind::Syntax,
                            corr.span,
                            "a block expansion takes a correlator of two bulk scalars, e.g. `<O(x1) O(x2)>`, or of one bulk and two boundary scalars, `<O(x) H1(s1) H2(s2)>`",
                        )
                        .with_label("not a two-point function of bulk scalars"));
                }
                let dims = match dims {
                    BlockDims::List(list) => Dims::List(
                        list.iter()
                            .map(|e| lowerer.scalar_parameter_expr(e))
                            .collect::<Result<_>>()?,
                    ),
                    BlockDims::TwistSpin(..) => {
                        return Err(lowerer
                            .err(
                                ErrorKind::Syntax,
                                *span,
                                "twists and spins are the s-channel's",
                            )
                            .with_note("write `in s-channel blocks twist … , spin …`"))
                    }
                    BlockDims::Tower(tower) => Dims::Tower {
                        from: lowerer.scalar_parameter_expr(&tower.0)?,
                        to: lowerer.scalar_parameter_expr(&tower.1)?,
                        step: tower
                            .2
                            .as_ref()
                            .map(|s| lowerer.scalar_parameter_expr(s))
                            .transpose()?,
                    },
                };
                if let Some((name, span)) = output {
                    check_output_name(&lowerer, name, *span)?;
                }
                items.push(Item {
                    kind: ItemKind::Decompose {
                        corr: lowered,
                        channel: *channel,
                        dims,
                        output: output.as_ref().map(|(n, _)| n.clone()),
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Derivation {
                name,
                start,
                steps,
                slip,
                span,
            } => {
                seen_expression = true;
                let profile = lowerer.free_indices(start)?;
                let mut lowered = Vec::new();
                for (step, why) in steps {
                    lowerer.same_free_indices(
                        &profile,
                        step,
                        ("the starting expression", "this step"),
                    )?;
                    lowered.push(Step {
                        expr: lowerer.expr(step)?,
                        line: source.line(step.span.start),
                        cited: why.iter().map(|w| (w.text.clone(), w.span)).collect(),
                    });
                }
                items.push(Item {
                    kind: ItemKind::Derivation {
                        name: name.text.clone(),
                        start: lowerer.expr(start)?,
                        steps: lowered,
                        free: profile.into_iter().collect(),
                        slip: *slip,
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Perturb {
                corr,
                coupling,
                operators,
                points,
                order,
                expects,
                span,
            } => {
                seen_expression = true;
                let kind = lowerer.perturb(corr, coupling, operators, points, order, expects)?;
                items.push(Item {
                    kind,
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Compare { lhs, rhs, span } => {
                seen_expression = true;
                let (lhs, rhs) = (
                    &lowerer.numeric_components(lhs)?,
                    &lowerer.numeric_components(rhs)?,
                );
                let profile = lowerer.free_indices(lhs)?;
                lowerer.same_free_indices(&profile, rhs, ("the left side", "the right side"))?;
                items.push(Item {
                    kind: ItemKind::Compare {
                        lhs: lowerer.expr(lhs)?,
                        rhs: lowerer.expr(rhs)?,
                        free: profile.into_iter().collect(),
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Classify { name, span } => {
                seen_expression = true;
                let (family, normal_component) = lowerer.classify(name)?;
                items.push(Item {
                    kind: ItemKind::Classify {
                        name: name.text.clone(),
                        family,
                        normal_component,
                    },
                    span: *span,
                    line: source.line(span.start),
                });
            }
            Stmt::Dimension(e) if seen_expression => {
                return Err(lowerer
                    .err(
                        ErrorKind::Name,
                        e.span,
                        "the dimension must be declared before any expression",
                    )
                    .with_label("declared too late"));
            }
            Stmt::Halfspace { coord } if seen_expression => {
                return Err(lowerer
                    .err(
                        ErrorKind::Name,
                        coord.span,
                        "the half-space must be declared before any expression",
                    )
                    .with_label("declared too late"));
            }
            decl => lowerer.declare(decl)?,
        }
    }
    lowerer.ctx.cross_ratios = lowerer.cross_ratios.take();
    Ok(Program {
        source: source.clone(),
        ctx: Arc::new(lowerer.ctx),
        items,
        rule_files,
        numeric: lowerer.numeric,
    })
}

/// What a declared name is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Declared {
    Operator,
    Point,
    Parameter,
    ParallelIndex,
    Function,
    Vector,
    Killing,
    Let,
}

impl Declared {
    fn describe(self) -> &'static str {
        match self {
            Declared::Operator => "an operator",
            Declared::Point => "a point",
            Declared::Parameter => "a parameter",
            Declared::ParallelIndex => "a parallel index",
            Declared::Function => "a function",
            Declared::Vector => "a parameter with indices",
            Declared::Killing => "a Killing vector",
            Declared::Let => "a named expression (`let`)",
        }
    }
}

struct Lowerer {
    source: Arc<Source>,
    ctx: Context,
    declared: BTreeMap<String, (Declared, Span)>,
    /// Named expressions from `let`, lowered where they are used, with the
    /// parameters of a function (`let f(t) = …`; none for a plain name).
    lets: BTreeMap<String, (Vec<Name>, Expr)>,
    /// The parameters of the functions being lowered, innermost last: each
    /// name stands for a symbol no input can spell (see
    /// [`functions`](self::functions)).
    bound: std::cell::RefCell<Vec<(String, Term)>>,
    /// The number of arguments of each unknown function, from its first
    /// call.
    arities: std::cell::RefCell<BTreeMap<String, (usize, Span)>>,
    /// Counter for fresh summation indices inside Killing vectors.
    fresh: std::cell::Cell<u32>,
    /// True while a numeric statement is lowered: components (`x1[0]`)
    /// are allowed there only.
    in_numeric: std::cell::Cell<bool>,
    /// How deeply the expression being lowered nests, named expressions
    /// substituted (see [`MAX_DEPTH`]).
    depth: std::cell::Cell<usize>,
    /// Nodes lowered for the current statement (see [`MAX_NODES`]).
    nodes: std::cell::Cell<usize>,
    /// Where the expression being lowered stands (see [`explicit::Scope`]).
    scope: explicit::Scope,
    /// Numeric set-up gathered from `model`, `coefficient` and `values`.
    numeric: NumericSpec,
    /// The pairs written as `xi(p, q)`, for [`Context::cross_ratios`].
    cross_ratios: std::cell::RefCell<std::collections::BTreeSet<(Point, Point)>>,
}

impl Lowerer {
    fn err(&self, kind: ErrorKind, span: Span, message: impl Into<String>) -> Error {
        Error::at(kind, &self.source, span, message)
    }

    /// A whole number in 0..=max written as a literal.
    fn small_number(&self, e: &Expr, max: usize, what: &str) -> Result<usize> {
        constant_value(e)
            .filter(|v| v.is_integer())
            .and_then(|v| num_traits::ToPrimitive::to_usize(&v.to_integer()))
            .filter(|n| *n <= max)
            .ok_or_else(|| {
                self.err(
                    ErrorKind::Syntax,
                    e.span,
                    format!("{what} must be a whole number from 0 to {max}"),
                )
                .with_label("not an order carried out")
            })
    }

    /// `perturb ⟨X⟩ by g O… on boundary z… to order N [expect …]`: the
    /// checks a parser cannot make.
    fn perturb(
        &mut self,
        corr: &Expr,
        coupling: &Expr,
        operators: &[Name],
        points: &[Name],
        order: &Expr,
        expects: &[(Option<Expr>, Expr)],
    ) -> Result<ItemKind> {
        let n = self.small_number(order, 2, "the order of `perturb`")?;
        if n == 0 {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    order.span,
                    "the order of `perturb` is 1 or 2",
                )
                .with_label("order 0 is the unperturbed correlator"));
        }
        let lowered = self.expr(corr)?;
        let Term::Corr(ops) = &lowered else {
            return Err(self
                .err(ErrorKind::Syntax, corr.span, "`perturb` takes one correlator")
                .with_label("not a correlator")
                .with_note("write the correlator alone: `perturb <P(x1) P(x2)> by g H C on boundary z1 z2 to order 2`"));
        };
        for op in ops {
            if self.ctx.is_boundary_point(&op.point) || !op.indices.is_empty() {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        corr.span,
                        format!(
                            "`perturb` handles correlators of bulk scalars at bulk points; `{}({})` is not one",
                            op.name, op.point.name
                        ),
                    )
                    .with_label("here")
                    .with_note("the wall integrals are then smooth except where two integration points meet"));
            }
        }
        let mut names = Vec::new();
        for o in operators {
            match self.ctx.operator(&o.text) {
                Some(decl) if decl.boundary && decl.rank == 0 => names.push(o.text.clone()),
                Some(_) => {
                    return Err(self
                        .err(
                            ErrorKind::Name,
                            o.span,
                            format!("`{}` is not a boundary scalar", o.text),
                        )
                        .with_label("the coupling is to boundary scalars")
                        .with_note("declare it `boundary scalar NAME dim …`"))
                }
                None => {
                    return Err(self
                        .err(
                            ErrorKind::Name,
                            o.span,
                            format!("`{}` is not a declared operator", o.text),
                        )
                        .with_label("unknown operator")
                        .with_note("declare it `boundary scalar NAME dim …`"))
                }
            }
        }
        let mut at = Vec::new();
        for p in points {
            let Some((rank, decl)) = self.ctx.point(&p.text) else {
                return Err(self
                    .err(
                        ErrorKind::Name,
                        p.span,
                        format!("`{}` is not a declared point", p.text),
                    )
                    .with_label("unknown point")
                    .with_note("declare the integration points `boundary points z1 z2`"));
            };
            if !decl.boundary {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        p.span,
                        format!("`{}` is not a boundary point", p.text),
                    )
                    .with_label("integrated over the wall")
                    .with_note("declare the integration points `boundary points z1 z2`"));
            }
            let point = Point::named(rank, p.text.clone());
            if lowered.mentions_point(&point) || at.contains(&point) {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        p.span,
                        format!("`{}` is used twice", p.text),
                    )
                    .with_label("an integration point must be a point of its own"));
            }
            at.push(point);
        }
        if at.len() != n {
            let span = points.last().map_or(order.span, |p| p.span);
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    span,
                    format!(
                        "order {n} integrates over {n} point(s) of the wall, and {} are named",
                        at.len()
                    ),
                )
                .with_label("one boundary point per order")
                .with_note("`… on boundary z1 z2 to order 2`"));
        }
        let mut lowered_expects = Vec::new();
        for (which, e) in expects {
            let k = match which {
                Some(w) => {
                    let k = self.small_number(w, n, "an expected order")?;
                    Some(k)
                }
                None => None,
            };
            let e = &self.numeric_components(e)?;
            let free = self.free_indices(e)?;
            if !free.is_empty() {
                return Err(self
                    .err(
                        ErrorKind::Index,
                        e.span,
                        "an expected correction has no free indices",
                    )
                    .with_label("free indices"));
            }
            lowered_expects.push((k, self.expr(e)?));
        }
        Ok(ItemKind::Perturb {
            corr: lowered.clone(),
            coupling: self.expr(coupling)?,
            operators: names,
            points: at,
            order: n,
            expects: lowered_expects,
        })
    }

    // ───────────────────────── declarations ─────────────────────────

    fn declare(&mut self, stmt: &Stmt) -> Result<()> {
        match stmt {
            Stmt::Dimension(e) => {
                if self.ctx.dimension.is_some() {
                    return Err(self.err(
                        ErrorKind::Name,
                        e.span,
                        "the dimension is declared twice",
                    ));
                }
                let dim = match &e.kind {
                    ExprKind::Name(n) if n.text == DIMENSION => Term::Sym(DIMENSION.into()),
                    ExprKind::Num(c)
                        if c.is_integer() && *c >= BigRational::from_integer(2.into()) =>
                    {
                        Term::Num(c.clone())
                    }
                    _ => {
                        return Err(self
                            .err(
                                ErrorKind::Syntax,
                                e.span,
                                "a dimension is a whole number of at least 2, or the symbol d",
                            )
                            .with_label("not a dimension"))
                    }
                };
                self.ctx.dimension = Some(dim);
                self.ctx.add_builtins();
            }
            Stmt::Halfspace { coord } => {
                if self.ctx.halfspace.is_some() {
                    return Err(self.err(
                        ErrorKind::Name,
                        coord.span,
                        "the half-space is declared twice",
                    ));
                }
                self.reserve(coord, "the normal coordinate")?;
                self.ctx.halfspace = Some(coord.text.clone());
                self.ctx.add_builtins();
            }
            Stmt::Operator {
                boundary,
                kind,
                name,
                attrs,
            } => {
                if *boundary && !self.ctx.has_halfspace() {
                    return Err(self
                        .err(
                            ErrorKind::Placement,
                            name.span,
                            format!("boundary operator `{}` needs a boundary", name.text),
                        )
                        .with_label("declared on a boundary that does not exist")
                        .with_note("declare the boundary first, e.g. `halfspace y >= 0`"));
                }
                self.new_name(name, Declared::Operator)?;
                let mut values = BTreeMap::new();
                for (key, value) in attrs {
                    if values.contains_key(&key.text) {
                        return Err(self.err(
                            ErrorKind::Name,
                            key.span,
                            format!("attribute `{}` is given twice", key.text),
                        ));
                    }
                    // Bare names in attribute values declare themselves as
                    // parameters: `scalar O dim Delta` declares Delta.
                    self.declare_parameters_in(value)?;
                    if self.free_indices(value)?.iter().next().is_some() {
                        return Err(self.err(
                            ErrorKind::Index,
                            value.span,
                            "an attribute value cannot carry free indices",
                        ));
                    }
                    values.insert(key.text.clone(), self.expr(value)?);
                }
                if !values.contains_key("dim") {
                    return Err(self
                        .err(
                            ErrorKind::Name,
                            name.span,
                            format!("operator `{}` has no dimension", name.text),
                        )
                        .with_label("missing `dim`")
                        .with_note(format!("write e.g. `scalar {} dim Delta`", name.text)));
                }
                let rank = self.spin_of(*kind, name, attrs, &values)?;
                self.ctx.operators.insert(
                    name.text.clone(),
                    OperatorDecl {
                        name: name.text.clone(),
                        boundary: *boundary,
                        rank,
                        attrs: values,
                    },
                );
            }
            Stmt::Points { boundary, names } => {
                if *boundary && !self.ctx.has_halfspace() {
                    let span = names.first().map_or(Span::default(), |n| n.span);
                    return Err(self
                        .err(
                            ErrorKind::Placement,
                            span,
                            "boundary points need a boundary",
                        )
                        .with_label("declared on a boundary that does not exist")
                        .with_note("declare the boundary first, e.g. `halfspace y >= 0`"));
                }
                for name in names {
                    self.new_name(name, Declared::Point)?;
                    self.ctx.add_point(PointDecl {
                        name: name.text.clone(),
                        boundary: *boundary,
                    });
                }
            }
            Stmt::Parameters(names) => {
                for (name, indices) in names {
                    if indices.is_empty() {
                        self.new_name(name, Declared::Parameter)?;
                        self.ctx.parameters.insert(name.text.clone());
                    } else {
                        self.declare_tensor_parameter(name, indices)?;
                    }
                }
            }
            Stmt::Positive(names) => {
                for name in names {
                    if !self.ctx.parameters.contains(&name.text) {
                        self.new_name(name, Declared::Parameter)?;
                        self.ctx.parameters.insert(name.text.clone());
                    }
                    self.ctx.positive.insert(name.text.clone());
                }
            }
            Stmt::Parallel(names) => {
                if !self.ctx.has_halfspace() {
                    let span = names.first().map_or(Span::default(), |n| n.span);
                    return Err(self
                        .err(
                            ErrorKind::Placement,
                            span,
                            "parallel indices need a boundary",
                        )
                        .with_label("parallel to a boundary that does not exist")
                        .with_note("declare the boundary first, e.g. `halfspace y >= 0`"));
                }
                for name in names {
                    self.new_name(name, Declared::ParallelIndex)?;
                    self.ctx.parallel.insert(name.text.clone());
                }
            }
            Stmt::Functions(names) => {
                for name in names {
                    self.new_name(name, Declared::Function)?;
                    self.ctx.functions.insert(name.text.clone());
                }
            }
            Stmt::Let { name, params, expr } => self.declare_let(name, params, expr)?,
            Stmt::Killing {
                name, generator, ..
            } => self.declare_killing(name, generator)?,
            Stmt::Place {
                point,
                kind,
                region,
                ..
            } => self.declare_place(point, *kind, region)?,
            Stmt::PlaceBall { region, .. } => self.declare_ball_inside(region)?,
            Stmt::Position {
                point,
                coords,
                span,
            } => self.declare_position(point, coords, *span)?,
            Stmt::Model { spec, span } => self.declare_model(spec, *span)?,
            Stmt::Coefficient { names, value, span } => {
                self.declare_coefficient(names, value, *span)?
            }
            Stmt::Values(items) => self.declare_values(items)?,
            Stmt::Sample { count, seed, span } => self.declare_sample(count, seed, *span)?,
            Stmt::Tolerance { value, span } => self.declare_tolerance(value, *span)?,
            Stmt::Simplify { .. }
            | Stmt::Claim { .. }
            | Stmt::Rules { .. }
            | Stmt::Classify { .. }
            | Stmt::Evaluate { .. }
            | Stmt::Solve { .. }
            | Stmt::Flux { .. }
            | Stmt::Scan { .. }
            | Stmt::Decompose { .. }
            | Stmt::Structures { .. }
            | Stmt::Derivation { .. }
            | Stmt::Perturb { .. }
            | Stmt::Compare { .. } => {}
        }
        Ok(())
    }

    fn reserve(&self, name: &Name, what: &str) -> Result<()> {
        let builtin = [
            (DIMENSION, "the dimension"),
            (crate::context::SPHERE_AREA, "the area of the unit sphere"),
            (NORMAL, "the unit normal"),
            (STRESS_TENSOR, "the stress tensor"),
            (DISPLACEMENT, "the displacement operator"),
            (PI_NAMES[0], "the number π"),
            (PI_NAMES[1], "the number π"),
        ];
        if let Some((_, meaning)) = builtin.iter().find(|(b, _)| *b == name.text) {
            return Err(self
                .err(
                    ErrorKind::Name,
                    name.span,
                    format!(
                        "`{}` is built in ({meaning}) and cannot name {what}",
                        name.text
                    ),
                )
                .with_label("reserved name")
                .with_note(
                    "the names T, D, d, n, S_d, pi and π are reserved; choose another name",
                ));
        }
        if let Some((kind, first)) = self.declared.get(&name.text) {
            let line = self.source.line(first.start);
            return Err(self
                .err(
                    ErrorKind::Name,
                    name.span,
                    format!("`{}` is already declared as {}", name.text, kind.describe()),
                )
                .with_label("declared again")
                .with_note(format!("`{}` was first declared on line {line}", name.text)));
        }
        Ok(())
    }

    fn new_name(&mut self, name: &Name, kind: Declared) -> Result<()> {
        self.reserve(name, kind.describe())?;
        if self.ctx.halfspace.as_deref() == Some(name.text.as_str()) {
            return Err(self
                .err(
                    ErrorKind::Name,
                    name.span,
                    format!("`{}` is the normal coordinate", name.text),
                )
                .with_label("declared again"));
        }
        self.declared.insert(name.text.clone(), (kind, name.span));
        Ok(())
    }

    fn declare_parameters_in(&mut self, e: &Expr) -> Result<()> {
        match &e.kind {
            ExprKind::Name(n) if n.text != DIMENSION && !self.declared.contains_key(&n.text) => {
                self.new_name(n, Declared::Parameter)?;
                self.ctx.parameters.insert(n.text.clone());
            }
            ExprKind::Neg(a) => self.declare_parameters_in(a)?,
            ExprKind::Chain { first, rest } => {
                self.declare_parameters_in(first)?;
                for (_, e) in rest {
                    self.declare_parameters_in(e)?;
                }
            }
            ExprKind::Binary { lhs, rhs, .. } => {
                self.declare_parameters_in(lhs)?;
                self.declare_parameters_in(rhs)?;
            }
            _ => {}
        }
        Ok(())
    }

    /// Records every index name of the file by kind (after all declarations,
    /// since `parallel` may come after a use in rule-free files).
    fn collect_indices(&mut self, file: &ast::File) {
        let mut parallel = BTreeSet::new();
        for stmt in &file.stmts {
            if let Stmt::Parallel(names) = stmt {
                parallel.extend(names.iter().map(|n| n.text.clone()));
            }
        }
        let mut names = BTreeSet::new();
        for stmt in &file.stmts {
            match stmt {
                Stmt::Simplify { expr, expect, .. } => {
                    indices::collect(expr, &mut names);
                    if let Some(e) = expect {
                        indices::collect(e, &mut names);
                    }
                }
                Stmt::Claim { lhs, rhs, .. } => {
                    indices::collect(lhs, &mut names);
                    indices::collect(rhs, &mut names);
                }
                _ => {}
            }
        }
        for name in names {
            let kind = if parallel.contains(&name) {
                IndexKind::Parallel
            } else {
                IndexKind::Bulk
            };
            // Generated names (k1, k2, …) come after the file's own in
            // every pool, so printed output reads back with the same names.
            if kind == IndexKind::Bulk && crate::normal::is_generated_index(&name) {
                continue;
            }
            self.ctx.index_pool.entry(kind).or_default().insert(name);
        }
        for name in parallel {
            self.ctx
                .index_pool
                .entry(IndexKind::Parallel)
                .or_default()
                .insert(name);
        }
    }

    // ─────────────────────────── indices ────────────────────────────

    fn free_indices(&self, e: &Expr) -> Result<indices::Profile> {
        indices::profile(e).map_err(|v| {
            let error = self
                .err(ErrorKind::Index, v.span, v.message)
                .with_label(v.label);
            match v.note {
                Some(note) => error.with_note(note),
                None => error,
            }
        })
    }

    fn same_free_indices(
        &self,
        left: &indices::Profile,
        e: &Expr,
        (first, what): (&str, &str),
    ) -> Result<()> {
        let right = self.free_indices(e)?;
        if is_zero(e) {
            return Ok(());
        }
        let l: BTreeSet<&String> = left.iter().collect();
        let r: BTreeSet<&String> = right.iter().collect();
        if l != r {
            return Err(self
                .err(
                    ErrorKind::Index,
                    e.span,
                    format!(
                        "free indices do not match: {first} has {}, {what} has {}",
                        indices::describe(&l),
                        indices::describe(&r)
                    ),
                )
                .with_label("unbalanced indices")
                .with_note("both sides carry the same free indices; an index written twice in one term is summed"));
        }
        Ok(())
    }

    // ───────────────────────── expressions ──────────────────────────

    /// Lowers an expression, within the depth and size budgets: the
    /// parser bounds each expression as written, this bounds them with
    /// named expressions substituted.
    /// A dimension or other number written with parameters: no points, no
    /// indices.
    /// The function of a four-point `decompose … in s-channel blocks`: an
    /// expression in parameters, with `u` and `v` (when declared) standing
    /// for z z̄ and (1 - z)(1 - z̄) (docs/conventions.md §14), in d = 2 or 4.
    fn four_point_function(&self, e: &Expr) -> Result<Term> {
        let d = self.ctx.dim();
        if d != Term::int(2) && d != Term::int(4) {
            return Err(self
                .err(
                    ErrorKind::Unsupported,
                    e.span,
                    "four-point blocks have closed forms in d = 2 and d = 4 only",
                )
                .with_note("declare `dimension 2` or `dimension 4`"));
        }
        let t = self.expr(e)?;
        if !parameters_and_hypergeometric(&t) {
            return Err(self
                .err(
                    ErrorKind::Syntax,
                    e.span,
                    "an s-channel expansion takes a function of the parameters z and zb (or u and v), e.g. `1 + u^Dphi + (u/v)^Dphi`",
                )
                .with_label("mentions points, indices, correlators or functions other than ₂F₁ and the blocks")
                .with_note("declare the variables with `parameters z zb` (or `parameters u v`); u = z zb, v = (1 - z)(1 - zb)"));
        }
        Ok(t)
    }

    fn scalar_parameter_expr(&self, e: &Expr) -> Result<Term> {
        let t = self.expr(e)?;
        if is_constant_term(&t) {
            return Ok(t);
        }
        Err(self
            .err(
                ErrorKind::Syntax,
                e.span,
                "a dimension is a number or an expression in parameters (`Delta + 2`, `d/2 - 1`)",
            )
            .with_label("mentions points, indices or correlators"))
    }

    fn expr(&self, e: &Expr) -> Result<Term> {
        let nodes = self.nodes.get() + 1;
        self.nodes.set(nodes);
        if nodes > MAX_NODES {
            return Err(self
                .err(
                    ErrorKind::Limit,
                    e.span,
                    format!("expression too large: more than {MAX_NODES} terms once named expressions are substituted"),
                )
                .with_label("the limit is reached here")
                .with_note("a named expression (`let`) is copied wherever it is used"));
        }
        // The constructs the parser counts (brackets aside).
        let nests = matches!(
            e.kind,
            ExprKind::Neg(_)
                | ExprKind::Binary { .. }
                | ExprKind::Call { .. }
                | ExprKind::Deriv { .. }
                | ExprKind::Integral { .. }
                | ExprKind::Sum { .. }
        );
        if nests {
            self.descend(e.span, || self.lower_expr(e))
        } else {
            self.lower_expr(e)
        }
    }

    /// Runs `f` one level deeper, or fails at `span` past [`MAX_DEPTH`].
    fn descend<T>(&self, span: Span, f: impl FnOnce() -> Result<T>) -> Result<T> {
        let depth = self.depth.get();
        if depth >= MAX_DEPTH {
            let first = self.source.text[span.start..]
                .chars()
                .next()
                .map_or(0, char::len_utf8);
            return Err(self
                .err(
                    ErrorKind::Limit,
                    Span::new(span.start, span.start + first),
                    format!("nested too deeply (limit {MAX_DEPTH})"),
                )
                .with_label("this level is one too many")
                .with_note(format!("brackets, calls, derivatives, signs and powers nest at most {MAX_DEPTH} deep, counting named expressions (`let`) where they are used")));
        }
        self.depth.set(depth + 1);
        let out = f();
        self.depth.set(depth);
        out
    }

    fn lower_expr(&self, e: &Expr) -> Result<Term> {
        Ok(match &e.kind {
            ExprKind::Num(c) => Term::Num(c.clone()),
            ExprKind::Name(n) => self.scalar_name(n)?,
            ExprKind::Var(v) | ExprKind::Attr { var: v, .. } => {
                return Err(self.rule_syntax(v.span))
            }
            ExprKind::Sum { op, .. } => return Err(self.rule_syntax(op.span.to(e.span))),
            ExprKind::Distance(p, q) => self.distance(p, q, e.span)?,
            ExprKind::Length(p) => Term::Dist(self.point(p)?, crate::term::Point::origin()),
            ExprKind::Component { name, par, indices } => {
                self.component(name, *par, indices, e.span)?
            }
            ExprKind::Call {
                name,
                primes,
                orders,
                args,
                separators,
            } => self.call(
                &functions::Call {
                    name,
                    primes: *primes,
                    orders: orders.as_deref(),
                    args,
                    separators,
                },
                e.span,
            )?,
            ExprKind::Integral {
                var,
                region,
                surface,
                body,
            } => self.integral(var, region, *surface, body)?,
            ExprKind::Neg(a) => self.expr(a)?.negated(),
            ExprKind::Chain { first, rest } => {
                let mut parts = vec![self.expr(first)?];
                for (op, rhs) in rest {
                    let r = self.expr(rhs)?;
                    parts.push(match op {
                        BinOp::Sub => r.negated(),
                        BinOp::Div => {
                            self.nonzero_divisor(rhs)?;
                            Term::Pow(Box::new(r), Box::new(Term::int(-1)))
                        }
                        _ => r,
                    });
                }
                if matches!(rest.first(), Some((BinOp::Add | BinOp::Sub, _))) {
                    Term::Add(parts)
                } else {
                    Term::Mul(parts)
                }
            }
            ExprKind::Binary { op, lhs, rhs } => {
                let l = self.expr(lhs)?;
                let r = self.expr(rhs)?;
                match op {
                    BinOp::Add => Term::Add(vec![l, r]),
                    BinOp::Sub => Term::Add(vec![l, r.negated()]),
                    BinOp::Mul => Term::Mul(vec![l, r]),
                    BinOp::Div => {
                        self.nonzero_divisor(rhs)?;
                        Term::Mul(vec![l, Term::Pow(Box::new(r), Box::new(Term::int(-1)))])
                    }
                    BinOp::Pow => {
                        if let (Some(b), Some(x)) = (constant_value(lhs), constant_value(rhs)) {
                            if b.is_zero() && x.is_negative() {
                                return Err(self
                                    .err(
                                        ErrorKind::Arithmetic,
                                        e.span,
                                        "zero raised to a negative power",
                                    )
                                    .with_label("division by zero"));
                            }
                        }
                        Term::Pow(Box::new(l), Box::new(r))
                    }
                }
            }
            ExprKind::Corr(items) => {
                let mut ops: Vec<Op> = Vec::new();
                for item in items {
                    match item {
                        Insertion::Op(op) => {
                            let lowered = self.op(op)?;
                            // Two insertions at one point: a product of
                            // operators there is not defined.
                            if let Some(other) = ops.iter().find(|o| o.point == lowered.point) {
                                return Err(self
                                    .err(
                                        ErrorKind::Placement,
                                        op.span,
                                        format!(
                                            "`{}` and `{}` are both inserted at `{}`",
                                            other.name, lowered.name, lowered.point.name
                                        ),
                                    )
                                    .with_label("a second insertion at this point")
                                    .with_note(
                                        "a correlator takes its insertions at distinct points; \
                                         declare another point (`points x x1 x2`) for one of them",
                                    ));
                            }
                            ops.push(lowered);
                        }
                        Insertion::Splice(v) => return Err(self.rule_syntax(v.span)),
                    }
                }
                Term::Corr(ops)
            }
            ExprKind::Op(op) if self.is_call(op) => self.op_call(op)?,
            ExprKind::Op(op) if !op.name.is_var && self.ctx.killing.contains_key(&op.name.text) => {
                self.killing_vector(op)?
            }
            ExprKind::Op(op) => {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        op.span,
                        format!("operator `{}` stands outside a correlator", op.name.text),
                    )
                    .with_label("not inside `< >`")
                    .with_note(format!(
                        "write it inside a correlator, e.g. `<{}>`",
                        &self.source.text[op.span.start..op.span.end]
                    )))
            }
            ExprKind::Deriv { index, point, body } => {
                let i = self.index(index)?;
                let p = self.point(point)?;
                if p.par {
                    return Err(self
                        .err(ErrorKind::Placement, point.span, "derivatives are taken with respect to declared points, not projections")
                        .with_label("a projection"));
                }
                // A boundary point moves only along the wall: ∂[n] there is
                // zero by convention, and writing it is a slip.
                if i == Index::N && self.ctx.is_boundary_point(&p) {
                    return Err(self
                        .err(
                            ErrorKind::Index,
                            index.span,
                            format!("`{}` is a boundary point: it moves only along the wall", p.name),
                        )
                        .with_label("a derivative along the normal")
                        .with_note(
                            "derivatives at a boundary point run along the wall (a parallel index; \
                             a bulk index is projected onto the wall); for the normal derivative of a \
                             field at the wall, map an operator to `boundary-dphi` in the model",
                        ));
                }
                Term::Der(i, p, Box::new(self.expr(body)?))
            }
            ExprKind::Kron(i, j) => Term::Kron(self.index(i)?, self.index(j)?),
            ExprKind::Normal(i) => {
                self.need_halfspace(e.span, "the normal n")?;
                Term::Normal(self.index(i)?)
            }
            ExprKind::DeltaPoints(p, q) => {
                let a = self.point(p)?;
                let b = self.point(q)?;
                if a == b {
                    return Err(self
                        .err(
                            ErrorKind::Placement,
                            e.span,
                            format!("`δ({0} - {0})` compares a point with itself", p.name.text),
                        )
                        .with_label("same point twice")
                        .with_note("a δ-function of a point with itself is infinite; contact terms compare two different points"));
                }
                Term::DeltaFn(a, b)
            }
            ExprKind::DeltaNormal { coord, point } => {
                self.need_halfspace(e.span, "the boundary δ-function")?;
                if self.ctx.halfspace.as_deref() != Some(coord.text.as_str()) {
                    return Err(self
                        .err(
                            ErrorKind::Name,
                            coord.span,
                            format!("`{}` is not the normal coordinate", coord.text),
                        )
                        .with_label(format!("expected `{}`", self.ctx.normal_coord())));
                }
                let p = self.point(point)?;
                if self.ctx.is_boundary_point(&p) {
                    return Err(self
                        .err(
                            ErrorKind::Placement,
                            point.span,
                            "δ(y(p)) needs a bulk point p",
                        )
                        .with_label("a boundary point"));
                }
                Term::DeltaY(p)
            }
        })
    }

    /// A division by an expression that is the number zero is an error.
    fn nonzero_divisor(&self, rhs: &Expr) -> Result<()> {
        match constant_value(rhs) {
            Some(v) if v.is_zero() => Err(self
                .err(ErrorKind::Arithmetic, rhs.span, "division by zero")
                .with_label("this is zero")),
            _ => Ok(()),
        }
    }

    fn rule_syntax(&self, span: Span) -> Error {
        self.err(
            ErrorKind::Syntax,
            span,
            "rule syntax (`?x`, `...?rest`, `sum`, `?o.attr`) belongs in .rules files",
        )
        .with_label("not allowed in a .ward file")
    }

    pub(super) fn need_halfspace(&self, span: Span, what: &str) -> Result<()> {
        if self.ctx.has_halfspace() {
            Ok(())
        } else {
            Err(self
                .err(
                    ErrorKind::Placement,
                    span,
                    format!("{what} needs a boundary"),
                )
                .with_label("no boundary declared")
                .with_note("declare one with `halfspace y >= 0`"))
        }
    }

    /// π in the file's dimension, written through S_d (see [`pi_through_sphere_area`]).
    fn pi(&self, n: &Name) -> Result<Term> {
        let d = match self.ctx.dimension.as_ref() {
            Some(Term::Num(d)) if d.is_integer() => d.to_integer().to_string().parse::<u32>().ok(),
            _ => None,
        };
        d.and_then(pi_through_sphere_area).ok_or_else(|| {
            self.err(
                ErrorKind::Name,
                n.span,
                "π needs a whole number of dimensions, at least 2",
            )
            .with_label("π here")
            .with_note(
                "with a symbolic dimension write it through S_d = 2 π^(d/2)/Γ(d/2), the area of the unit sphere; with `dimension 3`, `pi` is S_d/4",
            )
        })
    }

    fn scalar_name(&self, n: &Name) -> Result<Term> {
        if let Some(t) = self.bound_parameter(&n.text) {
            return Ok(t);
        }
        if n.text == DIMENSION {
            return Ok(self.ctx.dim());
        }
        // S_d = 2 π^{d/2}/Γ(d/2), the area of the unit sphere: a symbol in
        // exact work, a number in numeric work.
        if n.text == crate::context::SPHERE_AREA {
            return Ok(Term::Sym(n.text.clone()));
        }
        // π, in a fixed dimension, through S_d, so that the two are never
        // taken for independent symbols (a claim 1/(4 π) = 1/S_d in d = 3
        // would otherwise read as refuted).
        if PI_NAMES.contains(&n.text.as_str()) {
            return self.pi(n);
        }
        match self.declared.get(&n.text) {
            Some((Declared::Parameter, _)) => Ok(Term::Sym(n.text.clone())),
            Some((Declared::Function, _)) => Err(self.function_without_argument(n)),
            Some((Declared::Let, _)) => match self.lets.get(&n.text) {
                Some((params, _)) if !params.is_empty() => Err(self.function_without_argument(n)),
                // A limit met inside the definition is reported where the
                // outermost named expression is used.
                Some((_, e)) => self
                    .descend(n.span, || self.expr(&self.fresh_components(e)))
                    .map_err(|mut err| {
                        if err.kind == ErrorKind::Limit {
                            err = err
                                .with_span(&self.source, n.span)
                                .with_label(format!("`{}` is substituted here", n.text));
                        }
                        err
                    }),
                None => Err(self.err(
                    ErrorKind::Name,
                    n.span,
                    "a named expression is used inside its own definition",
                )),
            },
            Some((kind, _)) => Err(self
                .err(
                    ErrorKind::Name,
                    n.span,
                    format!("`{}` is {}, not a parameter", n.text, kind.describe()),
                )
                .with_label("used as a number")),
            None => Err(self.undeclared_scalar(n)),
        }
    }

    /// A name used as `what` but never declared; `example` is a declaration
    /// that would make it valid.
    fn undeclared(&self, n: &Name, what: &str, example: &str) -> Error {
        self.err(
            ErrorKind::Name,
            n.span,
            format!("undeclared {what} `{}`", n.text),
        )
        .with_label("not declared")
        .with_note(format!("declare it before use, e.g. `{example}`"))
    }

    fn index(&self, n: &Name) -> Result<Index> {
        if n.is_var {
            return Err(self.rule_syntax(n.span));
        }
        if components::is_numeric(n) {
            return Err(self
                .err(
                    ErrorKind::Index,
                    n.span,
                    format!("the component `{}` is for numeric statements", n.text),
                )
                .with_label("a number as an index")
                .with_note("`evaluate`, `compare`, `solve` and `scan` take components (counted from 0, the normal one last); here write a free index, e.g. `mu`"));
        }
        if n.text == NORMAL {
            self.need_halfspace(n.span, "the normal index n")?;
            return Ok(Index::N);
        }
        match self.declared.get(&n.text) {
            Some((Declared::ParallelIndex, _)) | None => Ok(Index::Named(n.text.clone())),
            Some((kind, _)) => Err(self
                .err(
                    ErrorKind::Name,
                    n.span,
                    format!("`{}` is {}, not an index", n.text, kind.describe()),
                )
                .with_label("used as an index")),
        }
    }

    fn point(&self, p: &PointRef) -> Result<Point> {
        if p.name.is_var {
            return Err(self.rule_syntax(p.name.span));
        }
        let Some((rank, decl)) = self.ctx.point(&p.name.text) else {
            return Err(match self.declared.get(&p.name.text) {
                Some((kind, _)) => self
                    .err(
                        ErrorKind::Name,
                        p.name.span,
                        format!("`{}` is {}, not a point", p.name.text, kind.describe()),
                    )
                    .with_label("used as a point"),
                None => self.undeclared(&p.name, "point", &format!("points {}", p.name.text)),
            });
        };
        if p.par {
            self.need_halfspace(p.span, "a boundary projection")?;
            if decl.boundary {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        p.span,
                        format!("`{}` is already a boundary point", p.name.text),
                    )
                    .with_label("projection of a boundary point"));
            }
        }
        Ok(Point {
            rank,
            par: p.par,
            name: p.name.text.as_str().into(),
        })
    }

    /// The spin of a declared operator: 0 for `scalar`, 1 for `vector`, the
    /// `spin` attribute (a whole number, at least 1) for `tensor`; a `spin`
    /// given to a scalar or vector must agree with its kind.
    fn spin_of(
        &self,
        kind: OpKind,
        name: &Name,
        attrs: &[(Name, Expr)],
        values: &BTreeMap<String, Term>,
    ) -> Result<usize> {
        let written = attrs.iter().find(|(k, _)| k.text == "spin");
        let spin = match (written, values.get("spin")) {
            (Some((_, e)), Some(Term::Num(c)))
                if c.is_integer()
                    && *c >= BigRational::from_integer(0.into())
                    && *c <= BigRational::from_integer(MAX_SPIN.into()) =>
            {
                Some((c.to_integer().try_into().unwrap_or(0usize), e.span))
            }
            (Some((_, e)), _) => {
                return Err(self
                    .err(
                        ErrorKind::Name,
                        e.span,
                        "a spin is a whole number from 0 to 16",
                    )
                    .with_label("not a whole number in range"))
            }
            _ => None,
        };
        let implied = match kind {
            OpKind::Scalar => Some(0),
            OpKind::Vector => Some(1),
            OpKind::Tensor => None,
        };
        match (implied, spin) {
            (Some(l), None) => Ok(l),
            (Some(l), Some((s, _))) if s == l => Ok(l),
            (Some(l), Some((_, span))) => Err(self
                .err(
                    ErrorKind::Name,
                    span,
                    format!("this operator has spin {l} by its kind"),
                )
                .with_label("disagrees with the kind")
                .with_note("declare a tensor of spin ℓ with `tensor NAME dim Delta, spin ℓ`")),
            (None, Some((s, _))) if s >= 1 => Ok(s),
            (None, Some((_, span))) => Err(self
                .err(ErrorKind::Name, span, "a tensor has spin 1 or more")
                .with_label("spin 0 is a scalar")),
            (None, None) => Err(self
                .err(
                    ErrorKind::Name,
                    name.span,
                    format!("tensor `{}` has no spin", name.text),
                )
                .with_label("missing `spin`")
                .with_note(format!("write e.g. `tensor {} dim d, spin 2`", name.text))),
        }
    }

    fn op(&self, op: &ast::OpRef) -> Result<Op> {
        if op.name.is_var {
            return Err(self.rule_syntax(op.name.span));
        }
        let Some(decl) = self.ctx.operator(&op.name.text) else {
            if op.name.text == DISPLACEMENT {
                return Err(self
                    .err(
                        ErrorKind::Placement,
                        op.name.span,
                        "the displacement operator D needs a boundary",
                    )
                    .with_label("no boundary declared")
                    .with_note("declare one with `halfspace y >= 0`"));
            }
            return Err(match self.declared.get(&op.name.text) {
                Some((kind, _)) => self
                    .err(
                        ErrorKind::Name,
                        op.name.span,
                        format!("`{}` is {}, not an operator", op.name.text, kind.describe()),
                    )
                    .with_label("used as an operator"),
                None => self.undeclared(
                    &op.name,
                    "operator",
                    &format!("scalar {} dim Delta", op.name.text),
                ),
            });
        };
        if op.indices.len() != decl.rank {
            return Err(self
                .err(
                    ErrorKind::Index,
                    op.span,
                    format!(
                        "`{}` takes {}, found {}",
                        op.name.text,
                        count_indices(decl.rank),
                        op.indices.len()
                    ),
                )
                .with_label("wrong number of indices"));
        }
        let point = self.point(&op.point)?;
        let on_boundary = self.ctx.is_boundary_point(&point);
        if decl.boundary && !on_boundary {
            let what = if op.name.text == DISPLACEMENT {
                "the displacement operator D".to_string()
            } else {
                format!("boundary operator `{}`", op.name.text)
            };
            return Err(self
                .err(
                    ErrorKind::Placement,
                    op.point.span,
                    format!("{what} placed at bulk point `{}`", point.name),
                )
                .with_label("a bulk point")
                .with_note("use a boundary point (`boundary points s`) or a projection `x∥`"));
        }
        if !decl.boundary && on_boundary {
            return Err(self
                .err(
                    ErrorKind::Placement,
                    op.point.span,
                    format!(
                        "bulk operator `{}` placed at boundary point `{}`",
                        op.name.text, op.point.name.text
                    ),
                )
                .with_label("a boundary point")
                .with_note(
                    "bulk operators stand at bulk points; take the boundary limit explicitly",
                ));
        }
        let indices = op
            .indices
            .iter()
            .map(|i| self.index(i))
            .collect::<Result<Vec<_>>>()?;
        // A boundary tensor's indices run along the wall. (A boundary
        // vector keeps any index: T_nμ at the wall has the normal component D.)
        if decl.boundary && decl.rank >= 2 {
            for (written, index) in op.indices.iter().zip(&indices) {
                if !self.ctx.is_parallel(index) {
                    return Err(self
                        .err(
                            ErrorKind::Index,
                            written.span,
                            format!(
                                "the indices of boundary tensor `{}` run along the wall",
                                op.name.text
                            ),
                        )
                        .with_label("not a parallel index")
                        .with_note("declare parallel index names with `parallel a b`"));
                }
            }
        }
        Ok(Op {
            point,
            name: op.name.text.clone(),
            indices,
        })
    }
}

/// The largest spin a declaration may give.
const MAX_SPIN: i64 = 16;

/// The names of the number π in expressions.
const PI_NAMES: [&str; 2] = ["pi", "π"];

/// π through S_d = 2 π^(d/2)/Γ(d/2) in dimension `d` (common practice): for
/// d = 2m, S_d = 2 π^m/(m - 1)!; for d = 2m + 1, Γ(m + 1/2) = (2m)! √π/(4^m m!)
/// gives S_d = 2^(2m+1) m! π^m/(2m)!. So π = (S_d/c)^(1/m) with c the
/// rational prefactor (d = 3: S_d/4; d = 4: (S_d/2)^(1/2); d = 6: S_d^(1/3)).
/// `None` for d < 2 (S_1 = 2 holds no π) and for dimensions so large that
/// the factorials would be unwieldy (d > 64).
pub(crate) fn pi_through_sphere_area(d: u32) -> Option<Term> {
    use num_bigint::BigInt;
    if !(2..=64).contains(&d) {
        return None;
    }
    let factorial = |k: u32| (1..=k).fold(BigInt::from(1), |acc, j| acc * j);
    let m = d / 2;
    let c = if d % 2 == 0 {
        BigRational::new(BigInt::from(2), factorial(m - 1))
    } else {
        BigRational::new(
            BigInt::from(2).pow(2 * m + 1) * factorial(m),
            factorial(2 * m),
        )
    };
    let base = Term::Mul(vec![
        Term::Num(c.recip()),
        Term::Sym(crate::context::SPHERE_AREA.to_string()),
    ]);
    Some(if m == 1 {
        base
    } else {
        Term::Pow(
            Box::new(base),
            Box::new(Term::Num(BigRational::new(1.into(), BigInt::from(m)))),
        )
    })
}

/// "no index", "1 index", "2 indices".
fn count_indices(n: usize) -> String {
    match n {
        0 => "no index".into(),
        1 => "1 index".into(),
        n => format!("{n} indices"),
    }
}

/// True for an expression that is exactly the number zero, which stands for
/// the zero tensor of any index structure.
fn is_zero(e: &Expr) -> bool {
    constant_value(e).is_some_and(|v| v.is_zero())
}

/// The exact value of an expression made of numbers only (`None` also when
/// it would take more than [`MAX_BITS`] bits).
/// An output name is a relative path inside the file's folder.
fn check_output_name(lowerer: &Lowerer, name: &str, span: Span) -> Result<()> {
    let plain = !name.is_empty()
        && !name.starts_with('/')
        && name
            .chars()
            .all(|c| c.is_alphanumeric() || c == '-' || c == '_' || c == '/' || c == '.')
        && !name.contains("..");
    if plain {
        return Ok(());
    }
    Err(lowerer
        .err(
            ErrorKind::Syntax,
            span,
            "an output name is a relative path inside the file's folder, of letters, digits, `-`, `_`, `/` and `.` (no `..`)",
        )
        .with_label("not a plain name"))
}

/// The exchanged dimensions of a block expansion, as lowered.
#[derive(Clone, Debug, PartialEq)]
pub enum Dims {
    List(Vec<Term>),
    /// from, to, step (1 when not written): from, from + step, … ≤ to.
    Tower {
        from: Term,
        to: Term,
        step: Option<Term>,
    },
    /// The s-channel's twists and spins, each (from, to, step).
    TwistSpin {
        twist: Box<(Term, Term, Option<Term>)>,
        spin: Box<(Term, Term, Option<Term>)>,
        /// Δ12 = Δ1 - Δ2 and Δ34 = Δ3 - Δ4 (0 when not written).
        externals: Option<Box<(Term, Term)>>,
    },
}

/// True for a term of numbers and scalar parameters only.
/// True for a term of numbers, scalar parameters and ₂F₁ of them.
fn parameters_and_hypergeometric(t: &Term) -> bool {
    match t {
        Term::Num(_) | Term::Sym(_) => true,
        Term::Add(ts) | Term::Mul(ts) => ts.iter().all(parameters_and_hypergeometric),
        Term::Pow(a, b) => parameters_and_hypergeometric(a) && parameters_and_hypergeometric(b),
        Term::Fun(name, _, args) if name == crate::term::HYP2F1 => {
            args.iter().all(parameters_and_hypergeometric)
        }
        _ => false,
    }
}

fn is_constant_term(t: &Term) -> bool {
    match t {
        Term::Num(_) | Term::Sym(_) => true,
        Term::Add(ts) | Term::Mul(ts) => ts.iter().all(is_constant_term),
        Term::Pow(a, b) => is_constant_term(a) && is_constant_term(b),
        _ => false,
    }
}

fn constant_value(e: &Expr) -> Option<BigRational> {
    match &e.kind {
        ExprKind::Num(c) => Some(c.clone()),
        ExprKind::Neg(a) => constant_value(a).map(|v| -v),
        ExprKind::Chain { first, rest } => {
            let mut acc = constant_value(first)?;
            for (op, e) in rest {
                let r = constant_value(e)?;
                acc = match op {
                    BinOp::Add => acc + r,
                    BinOp::Sub => acc - r,
                    BinOp::Mul => acc * r,
                    BinOp::Div => (!r.is_zero()).then(|| acc / r)?,
                    BinOp::Pow => return None,
                };
                if crate::budget::bits(&acc) > MAX_BITS {
                    return None;
                }
            }
            Some(acc)
        }
        ExprKind::Binary { op, lhs, rhs } => {
            let l = constant_value(lhs)?;
            let r = constant_value(rhs)?;
            match op {
                BinOp::Add => Some(l + r),
                BinOp::Sub => Some(l - r),
                BinOp::Mul => Some(l * r),
                BinOp::Div => (!r.is_zero()).then(|| l / r),
                BinOp::Pow => None,
            }
        }
        _ => None,
    }
}
