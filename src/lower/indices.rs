//! Index bookkeeping on the AST: which indices of an expression are free,
//! which are summed, and where the rules of the summation convention break.
//!
//! An index written twice in a product is summed; three times is an error;
//! every term of a sum must have the same free indices. The normal index `n`
//! is a fixed direction, not a summation index, and is ignored here.

use std::collections::{BTreeMap, BTreeSet};

use crate::context::NORMAL;
use crate::syntax::ast::{BinOp, Expr, ExprKind, Insertion, Name, Span};

/// The free indices of an expression, sorted.
pub type Profile = BTreeSet<String>;

/// A break of the summation convention: where, what, and the text under the
/// caret.
pub struct Violation {
    pub span: Span,
    pub message: String,
    pub label: String,
    pub note: Option<&'static str>,
}

impl Violation {
    fn new(span: Span, message: String, label: impl Into<String>) -> Violation {
        Violation {
            span,
            message,
            label: label.into(),
            note: None,
        }
    }

    fn with_note(mut self, note: &'static str) -> Violation {
        self.note = Some(note);
        self
    }
}

/// Free indices of `e`, or the first violation.
pub fn profile(e: &Expr) -> Result<Profile, Violation> {
    Ok(walk(e)?.free.into_keys().collect())
}

/// Free indices of `e` with the place each is first written, or the first
/// violation.
pub fn free_spans(e: &Expr) -> Result<BTreeMap<String, Span>, Violation> {
    Ok(walk(e)?.free)
}

/// `{mu, nu}` or `none`.
pub fn describe(set: &BTreeSet<&String>) -> String {
    if set.is_empty() {
        "none".into()
    } else {
        let names: Vec<&str> = set.iter().map(|s| s.as_str()).collect();
        format!("{{{}}}", names.join(", "))
    }
}

/// Adds every index name used in `e` to `names`.
pub fn collect(e: &Expr, names: &mut BTreeSet<String>) {
    let mut add = |n: &Name| {
        if !n.is_var && n.text != NORMAL {
            names.insert(n.text.clone());
        }
    };
    match &e.kind {
        ExprKind::Neg(a) => collect(a, names),
        ExprKind::Chain { first, rest } => {
            collect(first, names);
            for (_, e) in rest {
                collect(e, names);
            }
        }
        ExprKind::Binary { lhs, rhs, .. } => {
            collect(lhs, names);
            collect(rhs, names);
        }
        ExprKind::Corr(items) => {
            for item in items {
                if let Insertion::Op(op) = item {
                    op.indices.iter().for_each(&mut add);
                }
            }
        }
        ExprKind::Op(op) => op.indices.iter().for_each(add),
        ExprKind::Deriv { index, body, .. } => {
            add(index);
            collect(body, names);
        }
        ExprKind::Kron(i, j) => {
            add(i);
            add(j);
        }
        ExprKind::Normal(i) => add(i),
        ExprKind::Sum { body, .. } | ExprKind::Integral { body, .. } => collect(body, names),
        ExprKind::Component { indices, .. } => indices.iter().for_each(add),
        _ => {}
    }
}

#[derive(Default)]
struct Usage {
    /// Free index → where it first appears.
    free: BTreeMap<String, Span>,
    /// Indices already summed inside → where they are summed.
    dummies: BTreeMap<String, Span>,
}

fn walk(e: &Expr) -> Result<Usage, Violation> {
    match &e.kind {
        ExprKind::Num(_) | ExprKind::Name(_) | ExprKind::Var(_) | ExprKind::Attr { .. } => {
            Ok(Usage::default())
        }
        ExprKind::DeltaPoints(..) | ExprKind::DeltaNormal { .. } => Ok(Usage::default()),
        ExprKind::Sum { body, .. } | ExprKind::Integral { body, .. } => walk(body),
        ExprKind::Distance(..) | ExprKind::Length(_) => Ok(Usage::default()),
        ExprKind::Component { indices, .. } => names(indices),
        ExprKind::Call { args, .. } => {
            for arg in args {
                if let Some((name, span)) = walk(arg)?.free.into_iter().next() {
                    return Err(Violation::new(
                        span,
                        format!("index `{name}` is free inside a function argument"),
                        "free index",
                    )
                    .with_note("a function takes a scalar argument; contract the index, e.g. `F(x1[mu] x1[mu])`"));
                }
            }
            Ok(Usage::default())
        }
        ExprKind::Neg(a) => walk(a),
        ExprKind::Chain { first, rest } => {
            let mut usage = walk(first)?;
            for (op, rhs) in rest {
                usage = combine(*op, usage, walk(rhs)?, first.span, rhs)?;
            }
            Ok(usage)
        }
        ExprKind::Binary { op, lhs, rhs } => combine(*op, walk(lhs)?, walk(rhs)?, lhs.span, rhs),
        ExprKind::Corr(items) => {
            let mut parts = Vec::new();
            for item in items {
                if let Insertion::Op(op) = item {
                    parts.push(names(&op.indices)?);
                }
            }
            product(parts)
        }
        ExprKind::Op(op) => names(&op.indices),
        ExprKind::Deriv { index, body, .. } => {
            product(vec![names(std::slice::from_ref(index))?, walk(body)?])
        }
        ExprKind::Kron(i, j) => names(&[i.clone(), j.clone()]),
        ExprKind::Normal(i) => names(std::slice::from_ref(i)),
    }
}

/// Combines the usage of `l` and of `rhs` (usage `r`) joined by `op`;
/// `lhs_span` is where the left operand is written.
fn combine(op: BinOp, l: Usage, r: Usage, lhs_span: Span, rhs: &Expr) -> Result<Usage, Violation> {
    match op {
        BinOp::Add | BinOp::Sub => {
            let lk: BTreeSet<&String> = l.free.keys().collect();
            let rk: BTreeSet<&String> = r.free.keys().collect();
            if lk != rk {
                return Err(Violation::new(
                    rhs.span,
                    format!(
                        "the terms of this sum have different free indices: {} and {}",
                        describe(&lk),
                        describe(&rk)
                    ),
                    if rk.is_empty() {
                        "this term has no free index".to_string()
                    } else {
                        format!("this term has free indices {}", describe(&rk))
                    },
                )
                .with_note(SUM_NOTE));
            }
            let mut dummies = l.dummies;
            dummies.extend(r.dummies);
            Ok(Usage {
                free: l.free,
                dummies,
            })
        }
        BinOp::Mul => product(vec![l, r]),
        BinOp::Div | BinOp::Pow => {
            // A numerator may carry free indices (`x1[mu]/|x1 - x2|^2`);
            // a denominator, a base or an exponent may not.
            let scalars: &[&Usage] = match op {
                BinOp::Div => &[&r],
                _ => &[&r, &l],
            };
            for usage in scalars {
                if let Some((name, span)) = usage.free.iter().next() {
                    return Err(Violation::new(
                        *span,
                        format!("index `{name}` is free inside a power or a denominator"),
                        "a free index",
                    ));
                }
            }
            if matches!(op, BinOp::Pow) && !l.dummies.is_empty() {
                return Err(Violation::new(
                    lhs_span,
                    "a power of a contracted expression is ambiguous; write the product out".into(),
                    "contains a summed index",
                ));
            }
            if matches!(op, BinOp::Div) {
                // A numerator's free index may not be summed in the
                // denominator too.
                return product(vec![l, r]);
            }
            let mut usage = l;
            usage.dummies.extend(r.dummies);
            Ok(usage)
        }
    }
}

/// The usage of a list of index names in one factor.
fn names(list: &[Name]) -> Result<Usage, Violation> {
    let parts = list
        .iter()
        .filter(|n| n.text != NORMAL || n.is_var)
        .map(|n| Usage {
            free: BTreeMap::from([(n.text.clone(), n.span)]),
            dummies: BTreeMap::new(),
        })
        .collect();
    product(parts)
}

/// Combines factors of a product: a name free in two factors becomes summed.
fn product(parts: Vec<Usage>) -> Result<Usage, Violation> {
    let mut out = Usage::default();
    for part in parts {
        for (d, span) in &part.dummies {
            if out.free.contains_key(d) || out.dummies.contains_key(d) {
                return Err(three_times(d, *span));
            }
        }
        for (name, span) in part.free {
            if out.dummies.contains_key(&name) {
                return Err(three_times(&name, span));
            }
            if out.free.remove(&name).is_some() {
                out.dummies.insert(name, span);
            } else {
                out.free.insert(name, span);
            }
        }
        out.dummies.extend(part.dummies);
    }
    Ok(out)
}

/// What every term of a sum must share.
const SUM_NOTE: &str = "every term of a sum carries the same free indices; an index written twice in one term is summed";

/// An index used once too often in a product.
fn three_times(name: &str, span: Span) -> Violation {
    Violation::new(
        span,
        format!("index `{name}` appears more than twice in one product"),
        format!("third use of `{name}`"),
    )
    .with_note(
        "a repeated index is summed and may appear exactly twice in a product; rename one pair",
    )
}
