//! Building a rule's right side in the e-graph from a match.
//!
//! Correlators are built with their insertions in canonical order (point
//! declaration order, then name, then indices), the same order terms use,
//! so equal correlators share one e-node.

use egg::{Id, Symbol};

use super::matcher::{holds, insertion, name_of, Binding};
use super::pattern::{IdxPat, NamePat, OpPat, Pat, PtPat};
use crate::context::{Context, NORMAL};
use crate::egraph::{add_term, EGraph, Ward};

/// Adds the template under `b`; `None` if an attribute it needs is missing.
pub fn instantiate(eg: &mut EGraph, ctx: &Context, pat: &Pat, b: &Binding) -> Option<Id> {
    Some(match pat {
        Pat::Var(v) => b.var(v)?,
        Pat::Num(c) => eg.add(Ward::Num(c.clone())),
        Pat::Dim => add_term(eg, &ctx.dim()),
        Pat::Sym(s) => eg.add(Ward::Name(Symbol::from(s.as_str()))),
        Pat::Add(ps) => {
            let ids = ps
                .iter()
                .map(|p| instantiate(eg, ctx, p, b))
                .collect::<Option<Vec<_>>>()?;
            eg.add(Ward::Add(ids.into()))
        }
        Pat::Mul(ps) => {
            let ids = ps
                .iter()
                .map(|p| instantiate(eg, ctx, p, b))
                .collect::<Option<Vec<_>>>()?;
            eg.add(Ward::Mul(ids.into()))
        }
        Pat::Pow(x, y) => {
            let x = instantiate(eg, ctx, x, b)?;
            let y = instantiate(eg, ctx, y, b)?;
            eg.add(Ward::Pow([x, y]))
        }
        Pat::Corr { items, splice } => {
            let mut ids = items
                .iter()
                .map(|op| instantiate_op(eg, op, b))
                .collect::<Option<Vec<_>>>()?;
            if let Some(s) = splice {
                ids.extend_from_slice(b.splice(s)?);
            }
            let mut keyed: Vec<(InsertionKey, Id)> = ids
                .into_iter()
                .map(|id| (insertion_key(eg, ctx, id), id))
                .collect();
            keyed.sort();
            eg.add(Ward::Corr(keyed.into_iter().map(|(_, id)| id).collect()))
        }
        Pat::Der(i, p, body) => {
            let i = index(eg, i, b)?;
            let p = point(eg, p, b)?;
            let body = instantiate(eg, ctx, body, b)?;
            eg.add(Ward::Der([i, p, body]))
        }
        Pat::Kron(i, j) => {
            let i = index(eg, i, b)?;
            let j = index(eg, j, b)?;
            eg.add(Ward::Kron([i, j]))
        }
        Pat::Normal(i) => {
            let i = index(eg, i, b)?;
            eg.add(Ward::Normal(i))
        }
        Pat::DeltaFn(p, q) => {
            let p = point(eg, p, b)?;
            let q = point(eg, q, b)?;
            eg.add(Ward::DeltaFn([p, q]))
        }
        Pat::DeltaY(p) => {
            let p = point(eg, p, b)?;
            eg.add(Ward::DeltaY(p))
        }
        Pat::Sum {
            op,
            slot,
            point: pt,
            splice,
            filter,
            body,
        } => {
            let elements = b.splice(splice)?.to_vec();
            let mut terms = Vec::new();
            for (k, &element) in elements.iter().enumerate() {
                let (name, at, indices) = insertion(eg, element)?;
                let indices = indices.to_vec();
                let mut local = b.clone();
                local.vars.push((op.clone(), name));
                local.vars.push((pt.clone(), at));
                if filter.as_ref().is_some_and(|c| !holds(eg, ctx, c, &local)) {
                    continue;
                }
                let Some((r, to)) = slot else {
                    terms.push(instantiate(eg, ctx, body, &local)?);
                    continue;
                };
                // One copy per index slot j: ?r is its index, and the
                // sequence has that one slot's index replaced by ?s.
                for (j, &slot_index) in indices.iter().enumerate() {
                    let mut inner = local.clone();
                    inner.vars.push((r.clone(), slot_index));
                    let target = index(eg, &IdxPat::Var(to.clone()), &inner)?;
                    if inner.var(to).is_none() {
                        inner.vars.push((to.clone(), target));
                    }
                    let mut children = vec![name, at];
                    children.extend(indices.iter().copied());
                    children[2 + j] = target;
                    let replaced = eg.add(Ward::Op(children.into()));
                    let mut sequence = elements.clone();
                    sequence[k] = replaced;
                    inner.splices.retain(|(n, _)| n != splice);
                    inner.splices.push((splice.clone(), sequence));
                    terms.push(instantiate(eg, ctx, body, &inner)?);
                }
            }
            match terms.len() {
                0 => eg.add(Ward::Num(num_traits::Zero::zero())),
                1 => terms[0],
                _ => eg.add(Ward::Add(terms.into())),
            }
        }
        Pat::Attr { var, key } => {
            let op = name_of(eg, b.var(var)?)?.to_string();
            let value = ctx.attribute(&op, key)?.clone();
            add_term(eg, &value)
        }
    })
}

fn instantiate_op(eg: &mut EGraph, op: &OpPat, b: &Binding) -> Option<Id> {
    let mut children = Vec::with_capacity(2 + op.indices.len());
    children.push(match &op.name {
        NamePat::Var(v) => b.var(v)?,
        NamePat::Lit(s) => eg.add(Ward::Name(Symbol::from(s.as_str()))),
    });
    children.push(point(eg, &op.point, b)?);
    for i in &op.indices {
        children.push(index(eg, i, b)?);
    }
    Some(eg.add(Ward::Op(children.into())))
}

fn index(eg: &mut EGraph, i: &IdxPat, b: &Binding) -> Option<Id> {
    match i {
        IdxPat::Var(v) => match b.var(v) {
            Some(id) => Some(id),
            None => {
                let name = fresh_index(eg, v, b);
                Some(eg.add(Ward::Name(Symbol::from(name.as_str()))))
            }
        },
        IdxPat::N => Some(eg.add(Ward::Name(Symbol::from(NORMAL)))),
    }
}

/// The name of a fresh summed index `?v` of a right side, for one match:
/// `v#` and the names the match binds, in the order of their variables.
/// No input can spell `#`, so it clashes with no index of the file; two
/// matches that bind different names get different fresh indices, and the
/// same match always the same one (so a rule applied again adds nothing
/// new and the run saturates). Normalisation renames it to one of the
/// file's index names, like every summed index.
fn fresh_index(eg: &EGraph, v: &str, b: &Binding) -> String {
    let mut bound: Vec<(&str, String)> = b
        .vars
        .iter()
        .map(|(var, id)| {
            let name = match name_of(eg, *id) {
                Some(n) => n.to_string(),
                None => match eg[*id].nodes.iter().find_map(|n| match n {
                    Ward::Par(inner) => name_of(eg, *inner),
                    _ => None,
                }) {
                    Some(n) => format!("par.{n}"),
                    None => format!("class{}", eg.find(*id)),
                },
            };
            (var.as_str(), name)
        })
        .collect();
    bound.sort();
    let mut out = format!("{v}#");
    for (var, name) in bound {
        out.push_str(var);
        out.push('=');
        out.push_str(&name);
        out.push(';');
    }
    out
}

fn point(eg: &mut EGraph, p: &PtPat, b: &Binding) -> Option<Id> {
    match p {
        PtPat::Var(v) => b.var(v),
        PtPat::Par(v) => {
            let inner = b.var(v)?;
            Some(eg.add(Ward::Par(inner)))
        }
    }
}

/// Sort key of an insertion: the same order as [`crate::term::Op`]'s.
type InsertionKey = ((u32, bool, String), String, Vec<(bool, String)>);

fn insertion_key(eg: &EGraph, ctx: &Context, class: Id) -> InsertionKey {
    let Some((name, at, indices)) = insertion(eg, class) else {
        return ((u32::MAX, false, String::new()), String::new(), Vec::new());
    };
    let (point_name, par) = match eg[at].nodes.iter().find_map(|n| match n {
        Ward::Par(inner) => Some(*inner),
        _ => None,
    }) {
        Some(inner) => (name_of(eg, inner).unwrap_or_default().to_string(), true),
        None => (name_of(eg, at).unwrap_or_default().to_string(), false),
    };
    let rank = ctx.point(&point_name).map_or(u32::MAX, |(r, _)| r);
    let indices = indices
        .iter()
        .map(|i| {
            let n = name_of(eg, *i).unwrap_or_default();
            (n != NORMAL, n.to_string())
        })
        .collect();
    (
        (rank, par, point_name),
        name_of(eg, name).unwrap_or_default().to_string(),
        indices,
    )
}
