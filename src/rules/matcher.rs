//! E-matching of rule patterns, with sequence variables.
//!
//! egg's own patterns have fixed arity; a Ward identity must act on a
//! correlator of any length. This matcher walks e-classes like egg's does,
//! and matches a correlator pattern `<A B ...?rest>` against a correlator
//! e-node by choosing distinct children for A and B (in any position) and
//! binding the remaining children, in order, to `?rest`.

use egg::{Id, Subst, Var};

use super::pattern::{Cond, IdxPat, NamePat, OpPat, Pat, PtPat};
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

    /// Binds `name` to `id`, or checks that an earlier binding agrees.
    fn bind(mut self, eg: &EGraph, name: &str, id: Id) -> Option<Binding> {
        match self.var(name) {
            Some(old) => (eg.find(old) == eg.find(id)).then_some(self),
            None => {
                self.vars.push((name.to_string(), id));
                Some(self)
            }
        }
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

/// All ways `pat` matches e-class `class`.
pub fn match_class(eg: &EGraph, pat: &Pat, class: Id, b: &Binding) -> Vec<Binding> {
    match pat {
        Pat::Var(v) => b.clone().bind(eg, v, class).into_iter().collect(),
        Pat::Num(c) => {
            if eg[class].data.as_ref() == Some(c) {
                vec![b.clone()]
            } else {
                vec![]
            }
        }
        _ => eg[class]
            .nodes
            .iter()
            .flat_map(|node| match_node(eg, pat, node, b))
            .collect(),
    }
}

/// All ways `pat` matches one e-node.
pub fn match_node(eg: &EGraph, pat: &Pat, node: &Ward, b: &Binding) -> Vec<Binding> {
    match (pat, node) {
        (Pat::Var(_) | Pat::Num(_), _) => vec![],
        (Pat::Sym(s), Ward::Name(n)) if n.as_str() == s => vec![b.clone()],
        (Pat::Add(ps), Ward::Add(ids)) | (Pat::Mul(ps), Ward::Mul(ids))
            if ps.len() == ids.len() =>
        {
            match_children(eg, ps.iter().zip(ids.iter()), b)
        }
        (Pat::Pow(x, y), Ward::Pow([a, e])) => {
            match_children(eg, [(&**x, a), (&**y, e)].into_iter(), b)
        }
        (Pat::Corr { items, splice }, Ward::Corr(children)) => {
            let mut out = Vec::new();
            let mut used = vec![false; children.len()];
            assign(
                eg,
                items,
                splice.as_deref(),
                children,
                &mut used,
                b,
                &mut out,
            );
            out
        }
        (Pat::Der(i, p, body), Ward::Der([ci, cp, cb])) => {
            let mut out = Vec::new();
            for b1 in match_index(eg, i, *ci, b) {
                for b2 in match_point(eg, p, *cp, &b1) {
                    out.extend(match_class(eg, body, *cb, &b2));
                }
            }
            out
        }
        (Pat::Kron(i, j), Ward::Kron([ci, cj])) => match_index(eg, i, *ci, b)
            .iter()
            .flat_map(|b1| match_index(eg, j, *cj, b1))
            .collect(),
        (Pat::Normal(i), Ward::Normal(ci)) => match_index(eg, i, *ci, b),
        (Pat::DeltaFn(p, q), Ward::DeltaFn([cp, cq])) => match_point(eg, p, *cp, b)
            .iter()
            .flat_map(|b1| match_point(eg, q, *cq, b1))
            .collect(),
        (Pat::DeltaY(p), Ward::DeltaY(cp)) => match_point(eg, p, *cp, b),
        _ => vec![],
    }
}

fn match_children<'p>(
    eg: &EGraph,
    pairs: impl Iterator<Item = (&'p Pat, &'p Id)>,
    b: &Binding,
) -> Vec<Binding> {
    let mut acc = vec![b.clone()];
    for (p, id) in pairs {
        acc = acc
            .iter()
            .flat_map(|b| match_class(eg, p, *id, b))
            .collect();
        if acc.is_empty() {
            break;
        }
    }
    acc
}

/// Chooses distinct children for the fixed insertion patterns; the rest go
/// to the sequence variable (or must not exist).
fn assign(
    eg: &EGraph,
    items: &[OpPat],
    splice: Option<&str>,
    children: &[Id],
    used: &mut [bool],
    b: &Binding,
    out: &mut Vec<Binding>,
) {
    let Some((first, rest)) = items.split_first() else {
        let leftover: Vec<Id> = children
            .iter()
            .zip(used.iter())
            .filter(|(_, u)| !**u)
            .map(|(id, _)| *id)
            .collect();
        match splice {
            Some(name) => {
                let mut b = b.clone();
                b.splices.push((name.to_string(), leftover));
                out.push(b);
            }
            None if leftover.is_empty() => out.push(b.clone()),
            None => {}
        }
        return;
    };
    for k in 0..children.len() {
        if used[k] {
            continue;
        }
        for b1 in match_op(eg, first, children[k], b) {
            used[k] = true;
            assign(eg, rest, splice, children, used, &b1, out);
            used[k] = false;
        }
    }
}

fn match_op(eg: &EGraph, pat: &OpPat, class: Id, b: &Binding) -> Vec<Binding> {
    let mut out = Vec::new();
    for node in &eg[class].nodes {
        let Ward::Op(children) = node else { continue };
        let [name, point, indices @ ..] = &children[..] else {
            continue;
        };
        if indices.len() != pat.indices.len() {
            continue;
        }
        let named: Vec<Binding> = match &pat.name {
            NamePat::Var(v) => b.clone().bind(eg, v, *name).into_iter().collect(),
            NamePat::Lit(s) if has_name(eg, *name, s) => vec![b.clone()],
            NamePat::Lit(_) => vec![],
        };
        let mut acc: Vec<Binding> = named
            .iter()
            .flat_map(|b1| match_point(eg, &pat.point, *point, b1))
            .collect();
        for (ip, ic) in pat.indices.iter().zip(indices) {
            acc = acc
                .iter()
                .flat_map(|b1| match_index(eg, ip, *ic, b1))
                .collect();
        }
        out.extend(acc);
    }
    out
}

fn match_index(eg: &EGraph, pat: &IdxPat, class: Id, b: &Binding) -> Vec<Binding> {
    match pat {
        IdxPat::Var(v) => b.clone().bind(eg, v, class).into_iter().collect(),
        IdxPat::N if has_name(eg, class, NORMAL) => vec![b.clone()],
        IdxPat::N => vec![],
    }
}

fn match_point(eg: &EGraph, pat: &PtPat, class: Id, b: &Binding) -> Vec<Binding> {
    match pat {
        PtPat::Var(v) => b.clone().bind(eg, v, class).into_iter().collect(),
        PtPat::Par(v) => eg[class]
            .nodes
            .iter()
            .filter_map(|n| match n {
                Ward::Par(inner) => b.clone().bind(eg, v, *inner),
                _ => None,
            })
            .collect(),
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
    let Some((_, point, indices)) = insertion(eg, class) else {
        return false;
    };
    match prop {
        Property::Scalar => indices.is_empty(),
        Property::Bulk => point_on_boundary(eg, ctx, point) == Some(false),
        Property::Boundary => point_on_boundary(eg, ctx, point) == Some(true),
        Property::Parallel | Property::Normal => false,
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
    match prop {
        Property::Normal => name == NORMAL,
        Property::Parallel => ctx.parallel.contains(name),
        Property::Bulk => name != NORMAL && !ctx.parallel.contains(name),
        Property::Boundary | Property::Scalar => false,
    }
}
