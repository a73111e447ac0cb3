//! Terms into e-classes and extracted expressions back into terms.

use egg::{Id, RecExpr, Symbol};
use num_rational::BigRational;

use super::{EGraph, Ward};
use crate::context::{Context, NORMAL};
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::term::{Index, Integral, Op, Point, Region, Term};

/// Adds a term to the e-graph and returns its class.
pub fn add_term(eg: &mut EGraph, t: &Term) -> Id {
    match t {
        Term::Num(c) => eg.add(Ward::Num(c.clone())),
        Term::Sym(s) => eg.add(Ward::Name(Symbol::from(s.as_str()))),
        Term::Add(ts) => {
            let ids = ts.iter().map(|t| add_term(eg, t)).collect();
            eg.add(Ward::Add(ids))
        }
        Term::Mul(ts) => {
            let ids = ts.iter().map(|t| add_term(eg, t)).collect();
            eg.add(Ward::Mul(ids))
        }
        Term::Pow(b, e) => {
            let b = add_term(eg, b);
            let e = add_term(eg, e);
            eg.add(Ward::Pow([b, e]))
        }
        Term::DeltaFn(p, q) => {
            let p = add_point(eg, p);
            let q = add_point(eg, q);
            eg.add(Ward::DeltaFn([p, q]))
        }
        Term::DeltaY(p) => {
            let p = add_point(eg, p);
            eg.add(Ward::DeltaY(p))
        }
        Term::Normal(i) => {
            let i = add_index(eg, i);
            eg.add(Ward::Normal(i))
        }
        Term::Kron(i, j) => {
            let i = add_index(eg, i);
            let j = add_index(eg, j);
            eg.add(Ward::Kron([i, j]))
        }
        Term::Der(i, p, body) => {
            let i = add_index(eg, i);
            let p = add_point(eg, p);
            let b = add_term(eg, body);
            eg.add(Ward::Der([i, p, b]))
        }
        Term::Corr(ops) => {
            let ids = ops.iter().map(|o| add_op(eg, o)).collect();
            eg.add(Ward::Corr(ids))
        }
        Term::Dist(p, q) => {
            let p = add_point(eg, p);
            let q = add_point(eg, q);
            eg.add(Ward::Dist([p, q]))
        }
        Term::Fun(name, orders, args) => {
            // The name, one order per argument, then the arguments.
            let mut children = vec![eg.add(Ward::Name(Symbol::from(name.as_str())))];
            children.extend(
                orders
                    .iter()
                    .map(|k| eg.add(Ward::Num(BigRational::from_integer((*k).into())))),
            );
            children.extend(args.iter().map(|a| add_term(eg, a)));
            eg.add(Ward::Fun(children.into()))
        }
        Term::Comp(p, i) => {
            let p = add_point(eg, p);
            let i = add_index(eg, i);
            eg.add(Ward::Comp([p, i]))
        }
        Term::Param(name, indices) => {
            let mut children = vec![eg.add(Ward::Name(Symbol::from(name.as_str())))];
            children.extend(indices.iter().map(|i| add_index(eg, i)));
            eg.add(Ward::Param(children.into()))
        }
        Term::OutNormal(i) => {
            let i = add_index(eg, i);
            eg.add(Ward::OutNormal(i))
        }
        Term::Integral(integral) => {
            let var = add_point(eg, &integral.var);
            let region = add_region(eg, &integral.region);
            let body = add_term(eg, &integral.body);
            if integral.surface {
                eg.add(Ward::Surface([var, region, body]))
            } else {
                eg.add(Ward::Integral([var, region, body]))
            }
        }
    }
}

fn add_region(eg: &mut EGraph, r: &Region) -> Id {
    match r {
        Region::Space => eg.add(Ward::Name(Symbol::from(SPACE))),
        Region::Halfspace => eg.add(Ward::Name(Symbol::from(HALFSPACE))),
        Region::Boundary => eg.add(Ward::Name(Symbol::from(BOUNDARY))),
        Region::Ball(c, radius) => {
            let c = add_point(eg, c);
            let radius = add_term(eg, radius);
            eg.add(Ward::Ball([c, radius]))
        }
    }
}

const SPACE: &str = "space";
const HALFSPACE: &str = "halfspace";
const BOUNDARY: &str = "boundary";

pub fn add_op(eg: &mut EGraph, op: &Op) -> Id {
    let mut children = Vec::with_capacity(2 + op.indices.len());
    children.push(eg.add(Ward::Name(Symbol::from(op.name.as_str()))));
    children.push(add_point(eg, &op.point));
    for i in &op.indices {
        children.push(add_index(eg, i));
    }
    eg.add(Ward::Op(children.into()))
}

pub fn add_point(eg: &mut EGraph, p: &Point) -> Id {
    let name = eg.add(Ward::Name(Symbol::from(&*p.name)));
    if p.par {
        eg.add(Ward::Par(name))
    } else {
        name
    }
}

pub fn add_index(eg: &mut EGraph, i: &Index) -> Id {
    let name = match i {
        Index::N => NORMAL,
        Index::Named(s) => s.as_str(),
    };
    eg.add(Ward::Name(Symbol::from(name)))
}

/// Reads an extracted expression back as a term.
pub fn extract_term(ctx: &Context, expr: &RecExpr<Ward>) -> Result<Term> {
    let root = Id::from(expr.as_ref().len().saturating_sub(1));
    Reader { ctx, expr }.term(root)
}

struct Reader<'a> {
    ctx: &'a Context,
    expr: &'a RecExpr<Ward>,
}

impl Reader<'_> {
    fn node(&self, id: Id) -> Result<&Ward> {
        self.expr
            .as_ref()
            .get(usize::from(id))
            .ok_or_else(|| internal("an extracted expression refers past its end"))
    }

    fn term(&self, id: Id) -> Result<Term> {
        Ok(match self.node(id)? {
            Ward::Num(c) => Term::Num(c.clone()),
            Ward::Name(s) => Term::Sym(s.as_str().to_string()),
            Ward::Add(ids) => Term::Add(ids.iter().map(|i| self.term(*i)).collect::<Result<_>>()?),
            Ward::Mul(ids) => Term::Mul(ids.iter().map(|i| self.term(*i)).collect::<Result<_>>()?),
            Ward::Pow([b, e]) => Term::Pow(Box::new(self.term(*b)?), Box::new(self.term(*e)?)),
            Ward::DeltaFn([p, q]) => Term::DeltaFn(self.point(*p)?, self.point(*q)?),
            Ward::DeltaY(p) => Term::DeltaY(self.point(*p)?),
            Ward::Normal(i) => Term::Normal(self.index(*i)?),
            Ward::Kron([i, j]) => Term::Kron(self.index(*i)?, self.index(*j)?),
            Ward::Der([i, p, b]) => {
                Term::Der(self.index(*i)?, self.point(*p)?, Box::new(self.term(*b)?))
            }
            Ward::Corr(ids) => Term::Corr(ids.iter().map(|i| self.op(*i)).collect::<Result<_>>()?),
            Ward::Dist([p, q]) => Term::Dist(self.point(*p)?, self.point(*q)?),
            Ward::Fun(children) => {
                let [name, rest @ ..] = &children[..] else {
                    return Err(internal("a function without a name"));
                };
                if rest.len() % 2 != 0 {
                    return Err(internal("a function without one order per argument"));
                }
                let (orders, args) = rest.split_at(rest.len() / 2);
                let orders = orders
                    .iter()
                    .map(|k| match self.node(*k)? {
                        Ward::Num(c) if c.is_integer() => {
                            Ok(c.to_integer().try_into().unwrap_or(0))
                        }
                        _ => Err(internal("a function's order is not a number")),
                    })
                    .collect::<Result<_>>()?;
                Term::Fun(
                    self.name(*name)?,
                    orders,
                    args.iter().map(|a| self.term(*a)).collect::<Result<_>>()?,
                )
            }
            Ward::Comp([p, i]) => Term::Comp(self.point(*p)?, self.index(*i)?),
            Ward::Param(children) => {
                let [name, indices @ ..] = &children[..] else {
                    return Err(internal("a parameter without a name"));
                };
                Term::Param(
                    self.name(*name)?,
                    indices
                        .iter()
                        .map(|i| self.index(*i))
                        .collect::<Result<_>>()?,
                )
            }
            Ward::OutNormal(i) => Term::OutNormal(self.index(*i)?),
            Ward::Integral([v, r, b]) | Ward::Surface([v, r, b]) => {
                Term::Integral(Box::new(Integral {
                    var: self.point(*v)?,
                    region: self.region(*r)?,
                    surface: matches!(self.node(id)?, Ward::Surface(_)),
                    body: self.term(*b)?,
                }))
            }
            Ward::Op(_) | Ward::Par(_) | Ward::Ball(_) => {
                return Err(internal(
                    "an insertion, point or region stands where a term should",
                ))
            }
        })
    }

    fn region(&self, id: Id) -> Result<Region> {
        match self.node(id)? {
            Ward::Ball([c, r]) => Ok(Region::Ball(self.point(*c)?, self.term(*r)?)),
            Ward::Name(s) => match s.as_str() {
                SPACE => Ok(Region::Space),
                HALFSPACE => Ok(Region::Halfspace),
                BOUNDARY => Ok(Region::Boundary),
                _ => Err(internal("an unknown region")),
            },
            _ => Err(internal("expected a region")),
        }
    }

    fn op(&self, id: Id) -> Result<Op> {
        let Ward::Op(children) = self.node(id)? else {
            return Err(internal(
                "a correlator holds something other than an insertion",
            ));
        };
        let [name, point, indices @ ..] = &children[..] else {
            return Err(internal("an insertion without name or point"));
        };
        Ok(Op {
            name: self.name(*name)?,
            point: self.point(*point)?,
            indices: indices
                .iter()
                .map(|i| self.index(*i))
                .collect::<Result<_>>()?,
        })
    }

    fn name(&self, id: Id) -> Result<String> {
        match self.node(id)? {
            Ward::Name(s) => Ok(s.as_str().to_string()),
            _ => Err(internal("expected a name")),
        }
    }

    fn index(&self, id: Id) -> Result<Index> {
        let name = self.name(id)?;
        Ok(if name == NORMAL {
            Index::N
        } else {
            Index::Named(name)
        })
    }

    fn point(&self, id: Id) -> Result<Point> {
        let (name, par) = match self.node(id)? {
            Ward::Par(inner) => (self.name(*inner)?, true),
            _ => (self.name(id)?, false),
        };
        self.ctx
            .point_term(&name, par)
            .ok_or_else(|| internal(&format!("a rule produced the undeclared point `{name}`")))
    }
}

fn internal(message: &str) -> Error {
    Error::new(ErrorKind::Unsupported, format!("internal: {message}"))
}
