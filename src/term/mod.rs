//! The tree form of expressions after lowering: [`Term`].
//!
//! Terms are what every pass reads and writes: lowering produces them, the
//! e-graph phase takes them in and hands them back, normalisation puts them
//! in contact-term normal form and the printer writes them out.
//! The derived order is structural and deterministic: names compare as
//! strings, points by declaration rank, never by interned ids.

pub mod diff;
pub mod factor;
pub mod latex;
pub mod print;

use num_rational::BigRational;
use num_traits::{One, Zero};

/// A point argument: a declared point or the boundary projection of one.
///
/// Points order by `rank`, the position of their declaration in the file, so
/// output lists insertions in the order the user declared the points.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Point {
    pub rank: u32,
    pub par: bool,
    /// Shared, so that cloning a term does not copy names.
    pub name: Name,
}

/// A name inside terms: cheap to clone, compared as a string.
pub type Name = std::sync::Arc<str>;

/// The name of the Gauss hypergeometric function ₂F₁(a, b; c; z) inside
/// terms, as `Term::Fun(HYP2F1, [0, 0, 0, k], [a, b, c, z])` for its k-th
/// derivative in z. No declared name can take it: it does not start with a
/// letter. It is written `F21(a, b; c; z)` or `₂F₁(a, b; c; z)`.
pub const HYP2F1: &str = "₂F₁";

/// The ASCII spelling of [`HYP2F1`].
pub const HYP2F1_ASCII: &str = "F21";

/// The name of the origin of coordinates (on the wall, when there is one).
/// No declared point can take it: names start with a letter.
pub const ORIGIN: &str = "0";

impl Point {
    /// The origin: |p - 0| is the length of p, which contracted
    /// coordinates become (p[k] p[k] = |p|²).
    pub fn origin() -> Point {
        Point {
            rank: u32::MAX - 1,
            par: false,
            name: ORIGIN.into(),
        }
    }

    pub fn is_origin(&self) -> bool {
        &*self.name == ORIGIN
    }

    pub fn named(rank: u32, name: impl Into<Name>) -> Point {
        Point {
            rank,
            par: false,
            name: name.into(),
        }
    }

    /// True if a derivative with respect to `wrt` acts on this point
    /// (`par(x)` moves with `x`).
    pub fn depends_on(&self, wrt: &Point) -> bool {
        self.name == wrt.name
    }
}

/// A tensor index: the normal direction `n`, or a named index whose kind
/// (bulk or parallel) is looked up in the file's declarations.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Index {
    N,
    Named(String),
}

impl Index {
    pub fn name(&self) -> Option<&str> {
        match self {
            Index::N => None,
            Index::Named(s) => Some(s),
        }
    }
}

/// An operator insertion inside a correlator.
///
/// Field order matters: insertions sort by point first, then name.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Op {
    pub point: Point,
    pub name: String,
    pub indices: Vec<Index>,
}

/// An expression.
///
/// Variant order is the order factors appear in a printed product:
/// coefficients and explicit functions, then coordinates and parameter
/// components, δ-functions, tensors, integrals, and last derivatives and
/// correlators.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Term {
    Num(BigRational),
    /// A parameter or the dimension symbol `d`.
    Sym(String),
    Pow(Box<Term>, Box<Term>),
    Mul(Vec<Term>),
    Add(Vec<Term>),
    /// The distance |p - q| (p before q).
    Dist(Point, Point),
    /// A function at its arguments, differentiated `orders[k]` times with
    /// respect to argument k (`orders` has one entry per argument): an
    /// unknown function of one or several variables, or the Gauss
    /// hypergeometric function [`HYP2F1`] (differentiated in z only).
    Fun(String, Vec<u32>, Vec<Term>),
    /// The coordinate p[i] of a point (p[n] is its normal coordinate y).
    Comp(Point, Index),
    /// A component of a declared parameter vector or tensor: a[i], ω[i,j].
    Param(String, Vec<Index>),
    /// Bulk delta function δ(p - q).
    DeltaFn(Point, Point),
    /// Boundary delta function δ(y(p)) in the normal coordinate of p.
    DeltaY(Point),
    /// Unit normal n[i].
    Normal(Index),
    /// Kronecker delta δ[i,j].
    Kron(Index, Index),
    /// The outward unit normal N[i] of the surface of a surface integral.
    OutNormal(Index),
    /// An integral over a region or over its surface.
    Integral(Box<Integral>),
    /// ∂[i](p) applied to the body.
    Der(Index, Point, Box<Term>),
    /// A correlator ⟨…⟩.
    Corr(Vec<Op>),
}

/// `∫[var in region] { body }`, or `∮[var on region] { body }` over the
/// region's surface when `surface` is set.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Integral {
    pub var: Point,
    pub region: Region,
    pub surface: bool,
    pub body: Term,
}

/// A region of integration.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Region {
    /// All of R^d.
    Space,
    /// The closed half-space y >= 0 (T is extended by zero below it, so a
    /// δ-function on the wall carries its full weight).
    Halfspace,
    /// The boundary plane y = 0.
    Boundary,
    /// The ball around a point.
    Ball(Point, Term),
}

impl Term {
    /// ₂F₁(a, b; c; z) differentiated `k` times in z.
    pub fn hyp2f1(k: u32, a: Term, b: Term, c: Term, z: Term) -> Term {
        Term::Fun(HYP2F1.into(), vec![0, 0, 0, k], vec![a, b, c, z])
    }

    /// The parameters, argument and z-order of a ₂F₁ term.
    pub fn as_hyp2f1(&self) -> Option<([&Term; 4], u32)> {
        match self {
            Term::Fun(name, orders, args) if name == HYP2F1 => match (&orders[..], &args[..]) {
                ([0, 0, 0, k], [a, b, c, z]) => Some(([a, b, c, z], *k)),
                _ => None,
            },
            _ => None,
        }
    }

    pub fn int(n: i64) -> Term {
        Term::Num(BigRational::from_integer(n.into()))
    }

    pub fn zero() -> Term {
        Term::Num(BigRational::zero())
    }

    pub fn one() -> Term {
        Term::Num(BigRational::one())
    }

    pub fn is_zero(&self) -> bool {
        matches!(self, Term::Num(c) if c.is_zero())
    }

    pub fn negated(self) -> Term {
        Term::Mul(vec![Term::int(-1), self])
    }

    /// True if the term depends on point `p` (δ-functions, derivatives,
    /// insertions, coordinates, distances; not on a point an integral binds).
    pub fn mentions_point(&self, p: &Point) -> bool {
        match self {
            Term::Num(_) | Term::Sym(_) | Term::Normal(_) | Term::Kron(..) => false,
            Term::Param(..) | Term::OutNormal(_) => false,
            Term::Pow(a, b) => a.mentions_point(p) || b.mentions_point(p),
            Term::Mul(ts) | Term::Add(ts) => ts.iter().any(|t| t.mentions_point(p)),
            Term::Fun(_, _, args) => args.iter().any(|t| t.mentions_point(p)),
            Term::Dist(a, b) | Term::DeltaFn(a, b) => a.depends_on(p) || b.depends_on(p),
            Term::Comp(a, _) | Term::DeltaY(a) => a.depends_on(p),
            Term::Der(_, q, body) => q.depends_on(p) || body.mentions_point(p),
            Term::Corr(ops) => ops.iter().any(|o| o.point.depends_on(p)),
            Term::Integral(i) => {
                if i.var.name == p.name {
                    return false;
                }
                let region = match &i.region {
                    Region::Ball(c, r) => c.depends_on(p) || r.mentions_point(p),
                    _ => false,
                };
                region || i.body.mentions_point(p)
            }
        }
    }
}

impl Term {
    /// True if the term mentions any point (a distance, a coordinate, a
    /// δ-function, a derivative, a correlator or an integral).
    pub fn mentions_any_point(&self) -> bool {
        match self {
            Term::Num(_) | Term::Sym(_) | Term::Normal(_) | Term::Kron(..) => false,
            Term::Param(..) | Term::OutNormal(_) => false,
            Term::Pow(a, b) => a.mentions_any_point() || b.mentions_any_point(),
            Term::Mul(ts) | Term::Add(ts) | Term::Fun(_, _, ts) => {
                ts.iter().any(Term::mentions_any_point)
            }
            _ => true,
        }
    }

    /// A copy with every point passed through `point` and every index
    /// through `index`, everywhere inside, except the body of an integral
    /// that binds a point named `shadowed` (its points are not the outer
    /// ones).
    pub fn map(
        &self,
        point: &dyn Fn(&Point) -> Point,
        index: &dyn Fn(&Index) -> Index,
        shadowed: Option<&str>,
    ) -> Term {
        let sub = |t: &Term| t.map(point, index, shadowed);
        match self {
            Term::Num(_) | Term::Sym(_) => self.clone(),
            Term::Pow(a, b) => Term::Pow(Box::new(sub(a)), Box::new(sub(b))),
            Term::Mul(ts) => Term::Mul(ts.iter().map(sub).collect()),
            Term::Add(ts) => Term::Add(ts.iter().map(sub).collect()),
            Term::Dist(a, b) => Term::Dist(point(a), point(b)),
            Term::Fun(name, orders, args) => {
                Term::Fun(name.clone(), orders.clone(), args.iter().map(sub).collect())
            }
            Term::Comp(p, i) => Term::Comp(point(p), index(i)),
            Term::Param(name, indices) => {
                Term::Param(name.clone(), indices.iter().map(index).collect())
            }
            Term::DeltaFn(a, b) => Term::DeltaFn(point(a), point(b)),
            Term::DeltaY(a) => Term::DeltaY(point(a)),
            Term::Normal(i) => Term::Normal(index(i)),
            Term::Kron(i, j) => Term::Kron(index(i), index(j)),
            Term::OutNormal(i) => Term::OutNormal(index(i)),
            Term::Der(i, p, body) => Term::Der(index(i), point(p), Box::new(sub(body))),
            Term::Corr(ops) => Term::Corr(
                ops.iter()
                    .map(|o| Op {
                        point: point(&o.point),
                        name: o.name.clone(),
                        indices: o.indices.iter().map(index).collect(),
                    })
                    .collect(),
            ),
            Term::Integral(i) => {
                let bound = shadowed.is_some_and(|s| *i.var.name == *s);
                Term::Integral(Box::new(Integral {
                    var: if bound { i.var.clone() } else { point(&i.var) },
                    region: match &i.region {
                        Region::Ball(c, r) => Region::Ball(point(c), sub(r)),
                        r => r.clone(),
                    },
                    surface: i.surface,
                    body: if bound { i.body.clone() } else { sub(&i.body) },
                }))
            }
        }
    }
}
