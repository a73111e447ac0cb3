//! Rule patterns and templates: the lowered form of a rule's `from` and `to`.
//!
//! A pattern is a term with holes: `?x` variables for one e-class, one
//! `...?rest` sequence per correlator for "the other insertions", and, in
//! templates only, `sum ?o(?p) in ?rest { … }` (one copy of the body per
//! insertion of the sequence) and `?o.key` (an attribute of an operator).

use std::collections::BTreeSet;
use std::sync::Arc;

use num_rational::BigRational;

use crate::context::{DIMENSION, NORMAL};
use crate::diagnostic::{Error, ErrorKind, Result, Source};
use crate::syntax::ast::{
    self, BinOp, ConditionKind, Expr, ExprKind, Insertion, Name, Property, Span,
};

/// A pattern (rule left side) or template (rule right side).
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Pat {
    Var(String),
    Num(BigRational),
    /// The dimension `d` of the file the rule runs on.
    Dim,
    /// A literal parameter name.
    Sym(String),
    Add(Vec<Pat>),
    Mul(Vec<Pat>),
    Pow(Box<Pat>, Box<Pat>),
    Corr {
        items: Vec<OpPat>,
        splice: Option<String>,
    },
    Der(IdxPat, PtPat, Box<Pat>),
    Kron(IdxPat, IdxPat),
    Normal(IdxPat),
    DeltaFn(PtPat, PtPat),
    DeltaY(PtPat),
    /// `sum ?o(?p) in ?rest { … }`; with `slot` = (r, s), one copy per
    /// index slot of each insertion, ?r bound to that slot's index and the
    /// body's `...?rest` with that slot's index replaced by ?s.
    Sum {
        op: String,
        slot: Option<(String, String)>,
        point: String,
        splice: String,
        filter: Option<Cond>,
        body: Box<Pat>,
    },
    Attr {
        var: String,
        key: String,
    },
}

/// An insertion pattern `NAME[i…](p)`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct OpPat {
    pub name: NamePat,
    pub indices: Vec<IdxPat>,
    pub point: PtPat,
}

/// An operator name: literal (`T`) or variable (`?o`).
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum NamePat {
    Var(String),
    Lit(String),
}

/// An index: variable or the normal direction `n`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum IdxPat {
    Var(String),
    N,
}

/// A point: variable or the projection of one.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum PtPat {
    Var(String),
    Par(String),
}

/// A side condition, checked on a match.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Cond {
    Halfspace,
    NoHalfspace,
    Is(String, Property),
    Has(String, String),
}

/// Lowers a rule's two sides and conditions, checking that every variable
/// the template and conditions use is bound by the pattern.
pub fn lower_rule(source: &Arc<Source>, rule: &ast::Rule) -> Result<(Pat, Pat, Vec<Cond>)> {
    let l = Lowering { source };
    let from = l.pat(&rule.from, false)?;
    if matches!(from, Pat::Var(_)) {
        return Err(l.err(
            rule.from.span,
            "a rule's left side cannot be a bare variable",
        ));
    }
    let mut bound = Bound::default();
    collect_bound(&from, &mut bound);
    let to = l.pat(&rule.to, true)?;
    l.check_template(&rule.to, &to, &bound, &BTreeSet::new())?;
    // Fresh summed indices: index variables of the right side that the
    // left side does not bind. Each is renamed apart on every application
    // (`rules::apply`); written once, it would be a free index from nowhere.
    let mut counts = std::collections::BTreeMap::new();
    count_index_vars(&to, &mut counts);
    for (v, n) in &counts {
        if !bound.vars.contains(v) && *n < 2 {
            let span = var_span(&rule.to, v).unwrap_or(rule.to.span);
            return Err(Error::at(
                ErrorKind::Rule,
                source,
                span,
                format!("`?{v}` on the right side is not bound by the left side"),
            )
            .with_label("unbound variable")
            .with_note("an index variable new on the right side is a fresh summed index and must appear twice; any other variable must appear on the left side or in an enclosing `sum ?o(?p) in …`"));
        }
    }
    let mut conds = Vec::new();
    for c in &rule.conditions {
        let cond = l.cond(c)?;
        if let Cond::Is(v, _) | Cond::Has(v, _) = &cond {
            if !bound.vars.contains(v) && !bound.splices.contains(v) {
                return Err(l.err(
                    c.span,
                    format!("condition on `?{v}`, which the left side does not bind"),
                ));
            }
        }
        conds.push(cond);
    }
    Ok((from, to, conds))
}

/// How often each index variable occurs in a template (summed over all its
/// terms: a fresh index is summed within each product it appears in).
fn count_index_vars(p: &Pat, counts: &mut std::collections::BTreeMap<String, usize>) {
    let idx = |i: &IdxPat, counts: &mut std::collections::BTreeMap<String, usize>| {
        if let IdxPat::Var(v) = i {
            *counts.entry(v.clone()).or_insert(0) += 1;
        }
    };
    match p {
        Pat::Add(ps) | Pat::Mul(ps) => ps.iter().for_each(|q| count_index_vars(q, counts)),
        Pat::Pow(a, b) => {
            count_index_vars(a, counts);
            count_index_vars(b, counts);
        }
        Pat::Corr { items, .. } => {
            for item in items {
                item.indices.iter().for_each(|i| idx(i, counts));
            }
        }
        Pat::Der(i, _, body) => {
            idx(i, counts);
            count_index_vars(body, counts);
        }
        Pat::Kron(i, j) => {
            idx(i, counts);
            idx(j, counts);
        }
        Pat::Normal(i) => idx(i, counts),
        Pat::Sum { body, slot, .. } => match slot {
            None => count_index_vars(body, counts),
            Some((r, to)) => {
                // ?r is bound by the sum; ?s is written once in the header.
                let mut inner = std::collections::BTreeMap::new();
                count_index_vars(body, &mut inner);
                inner.remove(r);
                *inner.entry(to.clone()).or_insert(0) += 1;
                for (v, n) in inner {
                    *counts.entry(v).or_insert(0) += n;
                }
            }
        },
        _ => {}
    }
}

/// Variables a pattern binds.
#[derive(Default, Debug)]
pub struct Bound {
    pub vars: BTreeSet<String>,
    pub splices: BTreeSet<String>,
}

/// Adds the variables and sequences that pattern `p` binds to `b`.
pub fn collect_bound(p: &Pat, b: &mut Bound) {
    let idx = |i: &IdxPat, b: &mut Bound| {
        if let IdxPat::Var(v) = i {
            b.vars.insert(v.clone());
        }
    };
    let pt = |p: &PtPat, b: &mut Bound| match p {
        PtPat::Var(v) | PtPat::Par(v) => {
            b.vars.insert(v.clone());
        }
    };
    match p {
        Pat::Var(v) => {
            b.vars.insert(v.clone());
        }
        Pat::Add(ps) | Pat::Mul(ps) => ps.iter().for_each(|p| collect_bound(p, b)),
        Pat::Pow(x, y) => {
            collect_bound(x, b);
            collect_bound(y, b);
        }
        Pat::Corr { items, splice } => {
            for item in items {
                if let NamePat::Var(v) = &item.name {
                    b.vars.insert(v.clone());
                }
                item.indices.iter().for_each(|i| idx(i, b));
                pt(&item.point, b);
            }
            if let Some(s) = splice {
                b.splices.insert(s.clone());
            }
        }
        Pat::Der(i, p, body) => {
            idx(i, b);
            pt(p, b);
            collect_bound(body, b);
        }
        Pat::Kron(i, j) => {
            idx(i, b);
            idx(j, b);
        }
        Pat::Normal(i) => idx(i, b),
        Pat::DeltaFn(p, q) => {
            pt(p, b);
            pt(q, b);
        }
        Pat::DeltaY(p) => pt(p, b),
        Pat::Num(_) | Pat::Dim | Pat::Sym(_) | Pat::Sum { .. } | Pat::Attr { .. } => {}
    }
}

struct Lowering<'a> {
    source: &'a Arc<Source>,
}

impl Lowering<'_> {
    fn err(&self, span: Span, message: impl Into<String>) -> Error {
        Error::at(ErrorKind::Rule, self.source, span, message).with_label("in this rule")
    }

    fn pat(&self, e: &Expr, template: bool) -> Result<Pat> {
        Ok(match &e.kind {
            ExprKind::Num(c) => Pat::Num(c.clone()),
            ExprKind::Name(n) if n.text == DIMENSION => Pat::Dim,
            ExprKind::Name(n) => Pat::Sym(n.text.clone()),
            ExprKind::Var(v) => Pat::Var(v.text.clone()),
            ExprKind::Attr { var, key } => {
                if !template {
                    return Err(self.err(e.span, "`?o.key` may appear only on a rule's right side"));
                }
                Pat::Attr {
                    var: var.text.clone(),
                    key: key.text.clone(),
                }
            }
            ExprKind::Neg(a) => Pat::Mul(vec![
                Pat::Num(BigRational::from_integer((-1).into())),
                self.pat(a, template)?,
            ]),
            ExprKind::Chain { first, rest } => {
                let mut acc = self.pat(first, template)?;
                for (op, rhs) in rest {
                    acc = binary(*op, acc, self.pat(rhs, template)?);
                }
                acc
            }
            ExprKind::Binary { op, lhs, rhs } => {
                binary(*op, self.pat(lhs, template)?, self.pat(rhs, template)?)
            }
            ExprKind::Corr(items) => {
                let mut ops = Vec::new();
                let mut splice = None;
                for item in items {
                    match item {
                        Insertion::Op(op) => ops.push(OpPat {
                            name: if op.name.is_var {
                                NamePat::Var(op.name.text.clone())
                            } else {
                                NamePat::Lit(op.name.text.clone())
                            },
                            indices: op
                                .indices
                                .iter()
                                .map(|i| self.index(i))
                                .collect::<Result<_>>()?,
                            point: self.point(&op.point)?,
                        }),
                        Insertion::Splice(v) => {
                            if splice.is_some() {
                                return Err(self
                                    .err(v.span, "a correlator takes at most one `...?sequence`"));
                            }
                            splice = Some(v.text.clone());
                        }
                    }
                }
                Pat::Corr { items: ops, splice }
            }
            ExprKind::Distance(..)
            | ExprKind::Length(_)
            | ExprKind::Component { .. }
            | ExprKind::Call { .. }
            | ExprKind::Integral { .. } => {
                return Err(self.err(
                    e.span,
                    "explicit functions and integrals are not part of rule patterns; normalisation handles them",
                ))
            }
            ExprKind::Op(op) => {
                return Err(self.err(op.span, "an operator stands outside a correlator"))
            }
            ExprKind::Deriv { index, point, body } => Pat::Der(
                self.index(index)?,
                self.point(point)?,
                Box::new(self.pat(body, template)?),
            ),
            ExprKind::Kron(i, j) => Pat::Kron(self.index(i)?, self.index(j)?),
            ExprKind::Normal(i) => Pat::Normal(self.index(i)?),
            ExprKind::DeltaPoints(p, q) => Pat::DeltaFn(self.point(p)?, self.point(q)?),
            ExprKind::DeltaNormal { point, .. } => Pat::DeltaY(self.point(point)?),
            ExprKind::Sum {
                op,
                slot,
                point,
                splice,
                filter,
                body,
            } => {
                if !template {
                    return Err(self.err(
                        e.span,
                        "`sum … in …` may appear only on a rule's right side",
                    ));
                }
                Pat::Sum {
                    op: op.text.clone(),
                    slot: slot.as_ref().map(|(r, s)| (r.text.clone(), s.text.clone())),
                    point: point.text.clone(),
                    splice: splice.text.clone(),
                    filter: filter.as_ref().map(|c| self.cond(c)).transpose()?,
                    body: Box::new(self.pat(body, template)?),
                }
            }
        })
    }

    fn index(&self, n: &Name) -> Result<IdxPat> {
        if n.is_var {
            Ok(IdxPat::Var(n.text.clone()))
        } else if n.text == NORMAL {
            Ok(IdxPat::N)
        } else {
            Err(self.err(
                n.span,
                format!(
                    "index `{}` in a rule: use a variable like `?{}` or the normal `n`",
                    n.text, n.text
                ),
            ))
        }
    }

    fn point(&self, p: &ast::PointRef) -> Result<PtPat> {
        if !p.name.is_var {
            return Err(self.err(
                p.span,
                format!(
                    "point `{}` in a rule: use a variable like `?{}`",
                    p.name.text, p.name.text
                ),
            ));
        }
        Ok(if p.par {
            PtPat::Par(p.name.text.clone())
        } else {
            PtPat::Var(p.name.text.clone())
        })
    }

    fn cond(&self, c: &ast::Condition) -> Result<Cond> {
        Ok(match &c.kind {
            ConditionKind::Halfspace => Cond::Halfspace,
            ConditionKind::NoHalfspace => Cond::NoHalfspace,
            ConditionKind::Is(v, p) => Cond::Is(v.text.clone(), *p),
            ConditionKind::Has(v, k) => Cond::Has(v.text.clone(), k.text.clone()),
        })
    }

    /// Every variable of a template must be bound by the pattern or by an
    /// enclosing `sum`.
    fn check_template(
        &self,
        e: &Expr,
        p: &Pat,
        bound: &Bound,
        local: &BTreeSet<String>,
    ) -> Result<()> {
        let known = |v: &str| bound.vars.contains(v) || local.contains(v);
        match p {
            Pat::Var(v) | Pat::Attr { var: v, .. } => self.check_var(e, v, &known),
            Pat::Add(ps) | Pat::Mul(ps) => ps
                .iter()
                .try_for_each(|q| self.check_template(e, q, bound, local)),
            Pat::Pow(a, b) => {
                self.check_template(e, a, bound, local)?;
                self.check_template(e, b, bound, local)
            }
            Pat::Corr { items, splice } => {
                if let Some(s) = splice {
                    if !bound.splices.contains(s) {
                        return Err(self.err(
                            e.span,
                            format!("sequence `...?{s}` is not bound by the left side"),
                        ));
                    }
                }
                for item in items {
                    if let NamePat::Var(v) = &item.name {
                        self.check_var(e, v, &known)?;
                    }
                    for i in &item.indices {
                        self.check_index(e, i, &known)?;
                    }
                    self.check_point(e, &item.point, &known)?;
                }
                Ok(())
            }
            Pat::Der(i, pt, body) => {
                self.check_index(e, i, &known)?;
                self.check_point(e, pt, &known)?;
                self.check_template(e, body, bound, local)
            }
            Pat::Kron(i, j) => {
                self.check_index(e, i, &known)?;
                self.check_index(e, j, &known)
            }
            Pat::Normal(i) => self.check_index(e, i, &known),
            Pat::DeltaFn(a, b) => {
                self.check_point(e, a, &known)?;
                self.check_point(e, b, &known)
            }
            Pat::DeltaY(a) => self.check_point(e, a, &known),
            Pat::Sum {
                op,
                slot,
                point,
                splice,
                filter,
                body,
            } => {
                if !bound.splices.contains(splice) {
                    let span = var_span(e, splice).unwrap_or(e.span);
                    return Err(self.err(span, format!("`sum` runs over `?{splice}`, which the left side does not bind as `...?{splice}`")));
                }
                let mut inner = local.clone();
                inner.insert(op.clone());
                inner.insert(point.clone());
                if let Some((r, _)) = slot {
                    inner.insert(r.clone());
                }
                if let Some(Cond::Is(v, _) | Cond::Has(v, _)) = filter {
                    let known_inside = |w: &str| inner.contains(w) || bound.vars.contains(w);
                    self.check_var(e, v, &known_inside)?;
                }
                self.check_template(e, body, bound, &inner)
            }
            _ => Ok(()),
        }
    }

    /// An index variable the left side does not bind is a fresh summed
    /// index (checked to appear at least twice by [`fresh_indices`]).
    fn check_index(&self, _e: &Expr, _i: &IdxPat, _known: &dyn Fn(&str) -> bool) -> Result<()> {
        Ok(())
    }

    fn check_point(&self, e: &Expr, p: &PtPat, known: &dyn Fn(&str) -> bool) -> Result<()> {
        let (PtPat::Var(v) | PtPat::Par(v)) = p;
        self.check_var(e, v, known)
    }

    fn check_var(&self, e: &Expr, v: &str, known: &dyn Fn(&str) -> bool) -> Result<()> {
        if known(v) {
            Ok(())
        } else {
            let span = var_span(e, v).unwrap_or(e.span);
            Err(
                Error::at(ErrorKind::Rule, self.source, span, format!("`?{v}` on the right side is not bound by the left side"))
                    .with_label("unbound variable")
                    .with_note("every variable of a rule's right side must appear on its left side or in an enclosing `sum ?o(?p) in …`"),
            )
        }
    }
}

/// Where variable `?v` is first written inside `e`.
fn var_span(e: &Expr, v: &str) -> Option<Span> {
    let name = |n: &Name| (n.is_var && n.text == v).then_some(n.span);
    let point = |p: &ast::PointRef| name(&p.name);
    match &e.kind {
        ExprKind::Var(n) => name(n),
        ExprKind::Attr { var, .. } => name(var),
        ExprKind::Neg(a) => var_span(a, v),
        ExprKind::Chain { first, rest } => {
            var_span(first, v).or_else(|| rest.iter().find_map(|(_, e)| var_span(e, v)))
        }
        ExprKind::Binary { lhs, rhs, .. } => var_span(lhs, v).or_else(|| var_span(rhs, v)),
        ExprKind::Corr(items) => items.iter().find_map(|item| match item {
            Insertion::Op(op) => name(&op.name)
                .or_else(|| op.indices.iter().find_map(name))
                .or_else(|| point(&op.point)),
            Insertion::Splice(n) => name(n),
        }),
        ExprKind::Op(op) => name(&op.name)
            .or_else(|| op.indices.iter().find_map(name))
            .or_else(|| point(&op.point)),
        ExprKind::Deriv {
            index,
            point: p,
            body,
        } => name(index)
            .or_else(|| point(p))
            .or_else(|| var_span(body, v)),
        ExprKind::Kron(i, j) => name(i).or_else(|| name(j)),
        ExprKind::Normal(i) => name(i),
        ExprKind::DeltaPoints(p, q) => point(p).or_else(|| point(q)),
        ExprKind::DeltaNormal { point: p, .. } => point(p),
        ExprKind::Sum {
            slot,
            splice,
            filter,
            body,
            ..
        } => slot
            .as_ref()
            .and_then(|(r, to)| name(r).or_else(|| name(to)))
            .or_else(|| name(splice))
            .or_else(|| match filter.as_ref().map(|c| &c.kind) {
                Some(ast::ConditionKind::Is(n, _) | ast::ConditionKind::Has(n, _)) => name(n),
                _ => None,
            })
            .or_else(|| var_span(body, v)),
        ExprKind::Component { indices, .. } => indices.iter().find_map(name),
        ExprKind::Distance(p, q) => point(p).or_else(|| point(q)),
        ExprKind::Length(p) => point(p),
        ExprKind::Call { args, .. } => args.iter().find_map(|a| var_span(a, v)),
        ExprKind::Integral { var: p, body, .. } => point(p).or_else(|| var_span(body, v)),
        ExprKind::Num(_) | ExprKind::Name(_) => None,
    }
}

/// `l op r` as a pattern, a left sum or product flattened: `a + b + c` is
/// one n-ary sum.
fn binary(op: BinOp, l: Pat, r: Pat) -> Pat {
    let minus_one = || Pat::Num(BigRational::from_integer((-1).into()));
    match op {
        BinOp::Add => Pat::Add(flatten_add(l, r)),
        BinOp::Sub => Pat::Add(flatten_add(l, Pat::Mul(vec![minus_one(), r]))),
        BinOp::Mul => Pat::Mul(flatten_mul(l, r)),
        BinOp::Div => Pat::Mul(flatten_mul(l, Pat::Pow(Box::new(r), Box::new(minus_one())))),
        BinOp::Pow => Pat::Pow(Box::new(l), Box::new(r)),
    }
}

/// `l + r` with a left sum flattened: `a + b + c` is one n-ary sum.
fn flatten_add(l: Pat, r: Pat) -> Vec<Pat> {
    let mut out = match l {
        Pat::Add(ps) => ps,
        p => vec![p],
    };
    out.push(r);
    out
}

/// `l * r` with a left product flattened.
fn flatten_mul(l: Pat, r: Pat) -> Vec<Pat> {
    match (l, r) {
        (Pat::Mul(mut ps), r) => {
            ps.push(r);
            ps
        }
        (l, r) => vec![l, r],
    }
}
