//! E-matching of rule patterns, with sequence variables.
//!
//! egg's own patterns have fixed arity; a Ward identity must act on a
//! correlator of any length. This matcher walks e-classes like egg's does,
//! and matches a correlator pattern `<A B ...?rest>` against a correlator
//! e-node by choosing distinct children for A and B (in any position) and
//! binding the remaining children, in order, to `?rest`.
//!
//! Matches are enumerated lazily: each complete binding is handed to a
//! continuation, which may stop the search, and every binding tried is a
//! step of the matching budget (`budget::match_step`), so a pattern with
//! many insertion patterns on a long correlator stops at the limit instead
//! of building its falling-factorial list of matches first.

use std::ops::ControlFlow;

use egg::{Id, Subst, Var};

use super::pattern::{Cond, IdxPat, NamePat, OpPat, Pat, PtPat};
use crate::budget;
use crate::context::{Context, NORMAL};
use crate::egraph::{EGraph, Ward};
use crate::syntax::ast::Property;

/// What a match binds: variables to e-classes, sequences to lists of them.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Binding {
    pub vars: Vec<(String, Id)>,
    pub splices: Vec<(String, Vec<Id>)>,
}

impl Binding {
    pub fn var(&self, name: &str) -> Option<Id> {
        self.vars.iter().find(|(n, _)| n == name).map(|(_, id)| *id)
    }

    pub fn splice(&self, name: &str) -> Option<&[Id]> {
        self.splices
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, ids)| ids.as_slice())
    }

    /// Encodes the binding as an egg substitution: `?x` for variables and
    /// `?rest#0`, `?rest#1`, … for the elements of a sequence.
    pub fn to_subst(&self) -> Subst {
        let mut subst = Subst::with_capacity(self.vars.len());
        for (name, id) in &self.vars {
            subst.insert(var(name), *id);
        }
        for (name, ids) in &self.splices {
            for (k, id) in ids.iter().enumerate() {
                subst.insert(var(&format!("{name}#{k}")), *id);
            }
        }
        subst
    }

    /// Decodes [`Binding::to_subst`], given the names the pattern binds.
    pub fn from_subst(subst: &Subst, vars: &[String], splices: &[String]) -> Binding {
        let mut b = Binding::default();
        for name in vars {
            if let Some(id) = subst.get(var(name)) {
                b.vars.push((name.clone(), *id));
            }
        }
        for name in splices {
            let ids = (0..)
                .map_while(|k| subst.get(var(&format!("{name}#{k}"))).copied())
                .collect();
            b.splices.push((name.clone(), ids));
        }
        b
    }
}

fn var(name: &str) -> Var {
    Var::from(egg::Symbol::from(format!("?{name}")))
}

/// What a continuation tells the matcher: go on enumerating, or stop.
pub type Flow = ControlFlow<()>;

/// The continuation called with each complete match, in order.
pub type Found<'k> = dyn FnMut(&mut Binding) -> Flow + 'k;

/// Calls `found` with every way `pat` matches e-class `class`, extending
/// `b` (which is restored on return), until `found` or the matching budget
/// ([`budget::match_step`]) says stop. Matches come in the order of the
/// e-nodes and children, depth first; nothing is collected.
pub fn match_class(
    eg: &EGraph,
    pat: &Pat,
    class: Id,
    b: &mut Binding,
    found: &mut Found<'_>,
) -> Flow {
    match pat {
        Pat::Var(v) => bind(eg, v, class, b, found),
        Pat::Num(c) => {
            if eg[class].data.as_ref() == Some(c) {
                found(b)
            } else {
                Flow::Continue(())
            }
        }
        _ => {
            for node in &eg[class].nodes {
                match_node(eg, pat, node, b, found)?;
            }
            Flow::Continue(())
        }
    }
}

/// Calls `found` with every way `pat` matches one e-node (as
/// [`match_class`]).
pub fn match_node(
    eg: &EGraph,
    pat: &Pat,
    node: &Ward,
    b: &mut Binding,
    found: &mut Found<'_>,
) -> Flow {
    step()?;
    match (pat, node) {
        (Pat::Var(_) | Pat::Num(_), _) => Flow::Continue(()),
        (Pat::Sym(s), Ward::Name(n)) if n.as_str() == s => found(b),
        (Pat::Add(ps), Ward::Add(ids)) | (Pat::Mul(ps), Ward::Mul(ids))
            if ps.len() == ids.len() =>
        {
            let pairs: Vec<(&Pat, Id)> = ps.iter().zip(ids.iter().copied()).collect();
            match_children(eg, &pairs, b, found)
        }
        (Pat::Pow(x, y), Ward::Pow([a, e])) => match_children(eg, &[(x, *a), (y, *e)], b, found),
        (Pat::Corr { items, splice }, Ward::Corr(children)) => {
            let mut used = vec![false; children.len()];
            assign(eg, items, splice.as_deref(), children, &mut used, b, found)
        }
        (Pat::Der(i, p, body), Ward::Der([ci, cp, cb])) => match_index(eg, i, *ci, b, &mut |b| {
            match_point(eg, p, *cp, b, &mut |b| match_class(eg, body, *cb, b, found))
        }),
        (Pat::Kron(i, j), Ward::Kron([ci, cj])) => {
            match_index(eg, i, *ci, b, &mut |b| match_index(eg, j, *cj, b, found))
        }
        (Pat::Normal(i), Ward::Normal(ci)) => match_index(eg, i, *ci, b, found),
        (Pat::DeltaFn(p, q), Ward::DeltaFn([cp, cq])) => {
            match_point(eg, p, *cp, b, &mut |b| match_point(eg, q, *cq, b, found))
        }
        (Pat::DeltaY(p), Ward::DeltaY(cp)) => match_point(eg, p, *cp, b, found),
        _ => Flow::Continue(()),
    }
}

/// One step of the matching budget: `Break` once it is spent.
fn step() -> Flow {
    if budget::match_step() {
        Flow::Continue(())
    } else {
        Flow::Break(())
    }
}

/// Binds `name` to `id` (or checks that an earlier binding agrees) for the
/// duration of `found`.
fn bind(eg: &EGraph, name: &str, id: Id, b: &mut Binding, found: &mut Found<'_>) -> Flow {
    step()?;
    match b.var(name) {
        Some(old) if eg.find(old) == eg.find(id) => found(b),
        Some(_) => Flow::Continue(()),
        None => {
            b.vars.push((name.to_string(), id));
            let flow = found(b);
            b.vars.pop();
            flow
        }
    }
}

/// Matches the patterns of `pairs` against their classes, left to right.
fn match_children(
    eg: &EGraph,
    pairs: &[(&Pat, Id)],
    b: &mut Binding,
    found: &mut Found<'_>,
) -> Flow {
    match pairs.split_first() {
        None => found(b),
        Some(((p, id), rest)) => {
            match_class(eg, p, *id, b, &mut |b| match_children(eg, rest, b, found))
        }
    }
}

/// Chooses distinct children for the fixed insertion patterns; the rest go
/// to the sequence variable (or must not exist).
fn assign(
    eg: &EGraph,
    items: &[OpPat],
    splice: Option<&str>,
    children: &[Id],
    used: &mut [bool],
    b: &mut Binding,
    found: &mut Found<'_>,
) -> Flow {
    let Some((first, rest)) = items.split_first() else {
        let leftover: Vec<Id> = children
            .iter()
            .zip(used.iter())
            .filter(|(_, u)| !**u)
            .map(|(id, _)| *id)
            .collect();
        return match splice {
            Some(name) => {
                b.splices.push((name.to_string(), leftover));
                let flow = found(b);
                b.splices.pop();
                flow
            }
            None if leftover.is_empty() => found(b),
            None => Flow::Continue(()),
        };
    };
    for k in 0..children.len() {
        if used[k] {
            continue;
        }
        step()?;
        used[k] = true;
        let flow = match_op(eg, first, children[k], b, &mut |b| {
            assign(eg, rest, splice, children, used, b, found)
        });
        used[k] = false;
        flow?;
    }
    Flow::Continue(())
}

fn match_op(eg: &EGraph, pat: &OpPat, class: Id, b: &mut Binding, found: &mut Found<'_>) -> Flow {
    for node in &eg[class].nodes {
        let Ward::Op(children) = node else { continue };
        let [name, point, indices @ ..] = &children[..] else {
            continue;
        };
        if indices.len() != pat.indices.len() {
            continue;
        }
        let mut rest = |b: &mut Binding| {
            match_point(eg, &pat.point, *point, b, &mut |b| {
                match_indices(eg, &pat.indices, indices, b, found)
            })
        };
        match &pat.name {
            NamePat::Var(v) => bind(eg, v, *name, b, &mut rest)?,
            NamePat::Lit(s) if has_name(eg, *name, s) => rest(b)?,
            NamePat::Lit(_) => {}
        }
    }
    Flow::Continue(())
}

fn match_indices(
    eg: &EGraph,
    pats: &[IdxPat],
    classes: &[Id],
    b: &mut Binding,
    found: &mut Found<'_>,
) -> Flow {
    match (pats.split_first(), classes.split_first()) {
        (Some((p, ps)), Some((c, cs))) => {
            match_index(eg, p, *c, b, &mut |b| match_indices(eg, ps, cs, b, found))
        }
        _ => found(b),
    }
}

fn match_index(
    eg: &EGraph,
    pat: &IdxPat,
    class: Id,
    b: &mut Binding,
    found: &mut Found<'_>,
) -> Flow {
    match pat {
        IdxPat::Var(v) => bind(eg, v, class, b, found),
        IdxPat::N if has_name(eg, class, NORMAL) => found(b),
        IdxPat::N => Flow::Continue(()),
    }
}

fn match_point(
    eg: &EGraph,
    pat: &PtPat,
    class: Id,
    b: &mut Binding,
    found: &mut Found<'_>,
) -> Flow {
    match pat {
        PtPat::Var(v) => bind(eg, v, class, b, found),
        PtPat::Par(v) => {
            for n in &eg[class].nodes {
                if let Ward::Par(inner) = n {
                    bind(eg, v, *inner, b, found)?;
                }
            }
            Flow::Continue(())
        }
    }
}

pub fn has_name(eg: &EGraph, class: Id, name: &str) -> bool {
    eg[class]
        .nodes
        .iter()
        .any(|n| matches!(n, Ward::Name(s) if s.as_str() == name))
}

/// The name held by a class of names, if any.
pub fn name_of(eg: &EGraph, class: Id) -> Option<&str> {
    eg[class].nodes.iter().find_map(|n| match n {
        Ward::Name(s) => Some(s.as_str()),
        _ => None,
    })
}

/// The (name class, point class, index classes) of an insertion class.
pub fn insertion(eg: &EGraph, class: Id) -> Option<(Id, Id, &[Id])> {
    eg[class].nodes.iter().find_map(|n| match n {
        Ward::Op(children) => match &children[..] {
            [name, point, indices @ ..] => Some((*name, *point, indices)),
            _ => None,
        },
        _ => None,
    })
}

/// True if a point class lies on the boundary.
fn point_on_boundary(eg: &EGraph, ctx: &Context, class: Id) -> Option<bool> {
    if eg[class].nodes.iter().any(|n| matches!(n, Ward::Par(_))) {
        return Some(true);
    }
    let name = name_of(eg, class)?;
    ctx.point(name).map(|(_, p)| p.boundary)
}

/// Checks one condition against a binding.
pub fn holds(eg: &EGraph, ctx: &Context, cond: &Cond, b: &Binding) -> bool {
    match cond {
        Cond::Halfspace => ctx.has_halfspace(),
        Cond::NoHalfspace => !ctx.has_halfspace(),
        Cond::Is(v, prop) => {
            if let Some(ids) = b.splice(v) {
                // `spinning` on a sequence: at least one insertion has
                // indices; every other property holds for all of them.
                if *prop == Property::Spinning {
                    return ids.iter().any(|id| insertion_has(eg, ctx, *id, *prop));
                }
                return ids.iter().all(|id| insertion_has(eg, ctx, *id, *prop));
            }
            let Some(id) = b.var(v) else { return false };
            class_is(eg, ctx, id, *prop)
        }
        Cond::Has(v, key) => {
            let has = |name_class: Id| {
                name_of(eg, name_class).is_some_and(|op| ctx.attribute(op, key).is_some())
            };
            if let Some(ids) = b.splice(v) {
                return ids
                    .iter()
                    .all(|id| insertion(eg, *id).is_some_and(|(name, _, _)| has(name)));
            }
            b.var(v).is_some_and(has)
        }
    }
}

/// A property of a single insertion in a sequence.
fn insertion_has(eg: &EGraph, ctx: &Context, class: Id, prop: Property) -> bool {
    let Some((name, point, indices)) = insertion(eg, class) else {
        return false;
    };
    match prop {
        Property::Scalar => indices.is_empty(),
        Property::Spinning => !indices.is_empty(),
        Property::Bulk => point_on_boundary(eg, ctx, point) == Some(false),
        Property::Boundary => point_on_boundary(eg, ctx, point) == Some(true),
        Property::Parallel | Property::Normal => false,
        Property::Vector | Property::Spin(_) | Property::Conserved => {
            name_of(eg, name).is_some_and(|op| operator_is(ctx, op, prop))
        }
    }
}

/// A spin property of a declared operator: its spin (the number of its
/// indices; T has spin 2) or the flag `conserved` (T always).
fn operator_is(ctx: &Context, op: &str, prop: Property) -> bool {
    let Some(decl) = ctx.operator(op) else {
        return false;
    };
    match prop {
        Property::Scalar => decl.rank == 0,
        Property::Vector => decl.rank == 1,
        Property::Spin(l) => decl.rank == l as usize,
        Property::Spinning => decl.rank > 0,
        Property::Conserved => ctx.is_conserved(op),
        _ => false,
    }
}

/// A property of a point or index class.
fn class_is(eg: &EGraph, ctx: &Context, class: Id, prop: Property) -> bool {
    if let Some(on_boundary) = point_on_boundary(eg, ctx, class) {
        return match prop {
            Property::Bulk => !on_boundary,
            Property::Boundary => on_boundary,
            _ => false,
        };
    }
    let Some(name) = name_of(eg, class) else {
        return false;
    };
    // An operator's name (`?v` in `?v[?rho](?p)`): its spin.
    if matches!(
        prop,
        Property::Vector
            | Property::Spin(_)
            | Property::Conserved
            | Property::Scalar
            | Property::Spinning
    ) {
        return operator_is(ctx, name, prop);
    }
    match prop {
        Property::Normal => name == NORMAL,
        Property::Parallel => ctx.parallel.contains(name),
        Property::Bulk => name != NORMAL && !ctx.parallel.contains(name),
        _ => false,
    }
}
