//! The declarations of one `.ward` file: dimension, boundary, operators,
//! points, parameters and index kinds.
//!
//! A [`Context`] is built once by lowering and then only read: by the
//! normaliser (index kinds, the dimension), by rule conditions (bulk or
//! boundary points, operator attributes) and by the printer.

use std::collections::{BTreeMap, BTreeSet};

use crate::term::{Index, Point, Region, Term};

/// Name of the built-in stress tensor.
pub const STRESS_TENSOR: &str = "T";
/// Name of the built-in displacement operator.
pub const DISPLACEMENT: &str = "D";
/// Name of the dimension symbol.
pub const DIMENSION: &str = "d";
/// Name of the area of the unit sphere S^{d-1}.
pub const SPHERE_AREA: &str = "S_d";
/// The attribute a conserved operator declares (`vector J dim d - 1, conserved`).
pub const CONSERVED: &str = "conserved";
/// Name of the normal index.
pub const NORMAL: &str = "n";

/// A declared operator.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct OperatorDecl {
    pub name: String,
    /// Lives on the boundary y = 0 (and so only at boundary points).
    pub boundary: bool,
    /// Number of tensor indices (0 for scalars).
    pub rank: usize,
    /// Declared attributes such as `dim` or `charge`, as exact terms.
    pub attrs: BTreeMap<String, Term>,
}

/// A declared point.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PointDecl {
    pub name: String,
    pub boundary: bool,
}

/// A declared parameter with indices (a vector a[i] or a tensor ω[i,j]).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ParamDecl {
    pub name: String,
    pub rank: usize,
    /// No normal component: a[n] = 0, ω[n,i] = 0.
    pub parallel: bool,
    /// ω[i,j] = -ω[j,i].
    pub antisymmetric: bool,
}

/// A declared conformal Killing vector, by family and parameter.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Killing {
    /// ε = a, or ε = n when `param` is `None`.
    Translation(Option<String>),
    /// ε_i = ω[i,k] x[k].
    Rotation(String),
    /// ε_i = n[i] (e·x) - e[i] (n·x): rotation mixing n with the parallel e.
    Mixing(String),
    /// ε = λ x.
    Dilatation(String),
    /// ε_i = 2 (b·x) x[i] - x² b[i], or b = n when `param` is `None`.
    Special(Option<String>),
}

impl Killing {
    pub fn family(&self) -> &'static str {
        match self {
            Killing::Translation(_) => "translation",
            Killing::Rotation(_) | Killing::Mixing(_) => "rotation",
            Killing::Dilatation(_) => "dilatation",
            Killing::Special(_) => "special conformal transformation",
        }
    }
}

/// Where a point lies with respect to a region, as declared by `place`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Placement {
    Inside,
    Outside,
    OnSurface,
}

/// The kind of a named index.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum IndexKind {
    /// Runs over all d directions.
    Bulk,
    /// Runs over the d - 1 directions parallel to the boundary.
    Parallel,
}

/// Everything a file declares.
#[derive(Clone, Debug, Default)]
pub struct Context {
    /// The dimension: a number, or the symbol `d`.
    pub dimension: Option<Term>,
    /// Name of the normal coordinate when a half-space is declared.
    pub halfspace: Option<String>,
    pub operators: BTreeMap<String, OperatorDecl>,
    /// Points in declaration order; a point's rank is its position here.
    /// Add them with [`Context::add_point`], which indexes them by name.
    pub points: Vec<PointDecl>,
    /// Rank of each point by name, so that a lookup does not search
    /// `points` (a file may have a hundred points).
    pub point_ranks: std::collections::HashMap<String, u32>,
    pub parameters: BTreeSet<String>,
    /// Parameters declared positive (`positive r`).
    pub positive: BTreeSet<String>,
    pub parallel: BTreeSet<String>,
    /// Every index name used anywhere in the file, by kind, sorted. Dummy
    /// indices are renamed to the first free names of their kind, so both
    /// sides of a claim agree on dummy names.
    pub index_pool: BTreeMap<IndexKind, BTreeSet<String>>,
    /// Unknown functions of one variable.
    pub functions: BTreeSet<String>,
    /// Parameters with indices.
    pub params: BTreeMap<String, ParamDecl>,
    /// Conformal Killing vectors by name.
    pub killing: BTreeMap<String, Killing>,
    /// Declared positions of points relative to regions.
    pub placements: Vec<(String, Region, Placement)>,
    /// Balls declared clear of the wall (`place ball(x1, r) inside halfspace`).
    pub balls_inside: Vec<Region>,
    /// Numeric coordinates of points (`place x at (…)`), the normal one last.
    pub positions: BTreeMap<String, Vec<num_rational::BigRational>>,
    /// Coordinates that depend on parameters (`place x at (0, 0, h)`),
    /// worked out by the numeric layer; these points are not in `positions`.
    pub moving: BTreeMap<String, Vec<Term>>,
    /// The pairs of points whose cross-ratio the file writes as
    /// `xi(p, q)` (the lower-ranked point first): results print the
    /// cross-ratio of these pairs as `xi(p, q)` again.
    pub cross_ratios: BTreeSet<(crate::term::Point, crate::term::Point)>,
}

impl Context {
    /// The dimension as a term (`d` if none was declared).
    pub fn dim(&self) -> Term {
        self.dimension
            .clone()
            .unwrap_or_else(|| Term::Sym(DIMENSION.to_string()))
    }

    pub fn has_halfspace(&self) -> bool {
        self.halfspace.is_some()
    }

    /// The normal coordinate's name (`y` unless declared otherwise).
    pub fn normal_coord(&self) -> &str {
        self.halfspace.as_deref().unwrap_or("y")
    }

    /// Declares a point after the others.
    pub fn add_point(&mut self, decl: PointDecl) {
        self.point_ranks
            .insert(decl.name.clone(), self.points.len() as u32);
        self.points.push(decl);
    }

    /// A declared point's rank and declaration, by name.
    pub fn point(&self, name: &str) -> Option<(u32, &PointDecl)> {
        if let Some(&rank) = self.point_ranks.get(name) {
            if let Some(p) = self.points.get(rank as usize).filter(|p| p.name == name) {
                return Some((rank, p));
            }
        }
        // Points pushed without the index.
        self.points
            .iter()
            .enumerate()
            .find(|(_, p)| p.name == name)
            .map(|(i, p)| (i as u32, p))
    }

    /// The term-level point for a declared name (or the origin).
    pub fn point_term(&self, name: &str, par: bool) -> Option<Point> {
        if name == crate::term::ORIGIN && !par {
            return Some(Point::origin());
        }
        self.point(name).map(|(rank, _)| Point {
            rank,
            par,
            name: name.into(),
        })
    }

    /// True if the point lies on the boundary (declared there, or a `par(x)`).
    pub fn is_boundary_point(&self, p: &Point) -> bool {
        if p.par {
            return true;
        }
        // By rank first: a term's point carries its declaration's place.
        match self.points.get(p.rank as usize) {
            Some(d) if *d.name == *p.name => d.boundary,
            _ => self.point(&p.name).is_some_and(|(_, d)| d.boundary),
        }
    }

    pub fn index_kind(&self, name: &str) -> IndexKind {
        if self.parallel.contains(name) {
            IndexKind::Parallel
        } else {
            IndexKind::Bulk
        }
    }

    /// The trace δ[i,i] over an index of this kind: d or d - 1.
    pub fn trace(&self, kind: IndexKind) -> Term {
        match kind {
            IndexKind::Bulk => self.dim(),
            IndexKind::Parallel => Term::Add(vec![self.dim(), Term::int(-1)]),
        }
    }

    /// True for symbols known to be positive: the dimension, S_d and
    /// parameters declared positive.
    pub fn is_positive_symbol(&self, name: &str) -> bool {
        name == DIMENSION || name == SPHERE_AREA || self.positive.contains(name)
    }

    pub fn operator(&self, name: &str) -> Option<&OperatorDecl> {
        self.operators.get(name)
    }

    /// An operator attribute, e.g. `dim` of `O`.
    pub fn attribute(&self, op: &str, key: &str) -> Option<&Term> {
        self.operators.get(op).and_then(|o| o.attrs.get(key))
    }

    /// True if an index slot holds the normal direction or a parallel index.
    pub fn is_parallel(&self, index: &Index) -> bool {
        matches!(index, Index::Named(s) if self.parallel.contains(s))
    }

    /// The declared placement of a point with respect to a region.
    pub fn placement(&self, point: &str, region: &Region) -> Option<Placement> {
        self.placements
            .iter()
            .find(|(p, r, _)| p == point && r == region)
            .map(|(_, _, place)| *place)
    }

    /// True for operators whose indices are symmetric: T, and declared
    /// tensors of spin 2 or more (symmetric traceless).
    pub fn is_symmetric_op(&self, name: &str) -> bool {
        name == STRESS_TENSOR || self.operators.get(name).is_some_and(|o| o.rank >= 2)
    }

    /// True for declared tensors of spin 2 or more, whose traces vanish as
    /// operators (T is not one: its trace carries contact terms).
    pub fn is_traceless_op(&self, name: &str) -> bool {
        name != STRESS_TENSOR && self.operators.get(name).is_some_and(|o| o.rank >= 2)
    }

    /// True for a boundary operator of spin ≥ 2 (its indices run along the
    /// wall).
    pub fn is_boundary_tensor(&self, name: &str) -> bool {
        self.operators
            .get(name)
            .is_some_and(|o| o.boundary && o.rank >= 2)
    }

    /// True for T and for operators declared `conserved`.
    pub fn is_conserved(&self, name: &str) -> bool {
        name == STRESS_TENSOR
            || self
                .operators
                .get(name)
                .is_some_and(|o| o.attrs.contains_key(CONSERVED))
    }

    /// Adds the built-in operators: T always, D with a half-space.
    pub fn add_builtins(&mut self) {
        let dim = self.dim();
        let t = OperatorDecl {
            name: STRESS_TENSOR.into(),
            boundary: false,
            rank: 2,
            attrs: BTreeMap::from([
                ("dim".to_string(), dim.clone()),
                (CONSERVED.to_string(), Term::one()),
            ]),
        };
        self.operators.insert(t.name.clone(), t);
        if self.has_halfspace() {
            let d = OperatorDecl {
                name: DISPLACEMENT.into(),
                boundary: true,
                rank: 0,
                attrs: BTreeMap::from([("dim".to_string(), dim)]),
            };
            self.operators.insert(d.name.clone(), d);
        }
    }
}
