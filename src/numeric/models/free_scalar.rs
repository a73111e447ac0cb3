//! The free massless scalar φ in R^d, or in the half-space y ≥ 0 with a
//! Neumann (+) or Dirichlet (-) wall, by Wick contraction.
//!
//! Propagator, by the method of images (docs/conventions.md §4, common practice):
//!
//!   G(x, x') = C_φ ( |x - x'|^{2-d} ± |x - x̄'|^{2-d} ),  C_φ = 1/((d-2) S_d),
//!
//! with |x - x̄'|² = |x - x'|² + 4 y y' written as a sum in the term (a power
//! of a sum is a scalar atom the normaliser differentiates).
//!
//! Operators are composites of φ, named by a [`Mapping`] (T and D by
//! default): φ, :φ²:, the stress tensor
//!
//!   T_{μν} = ∂_μφ∂_νφ - ½δ_{μν}(∂φ)² - ξ(∂_μ∂_ν - δ_{μν}∂²)φ²,
//!   ξ = (d-2)/(4(d-1)) improved, ξ = 0 unimproved (a setting),
//!
//! the displacement operator D = T_nn at the wall (docs/conventions.md §4, derived):
//! ½(∂_nφ)² for Dirichlet, -½(∂_aφ̂)² + ξ ∂_a∂_a φ̂² for Neumann (the sums
//! over parallel a written as bulk sums minus the normal term), and the
//! boundary values φ̂, ∂_nφ and :φ̂²:.
//!
//! Normal ordering: bulk composites are normal-ordered with respect to the
//! vacuum without a boundary, so a self-contraction keeps only the image
//! term (⟨φ²(x)⟩ = ± C_φ/(2y)^{d-2}); boundary composites are normal-ordered
//! with respect to the boundary vacuum, so their self-contractions are
//! dropped (⟨D⟩ = 0 = lim ⟨T_nn⟩, and ⟨φ̂²⟩ would otherwise diverge).
//!
//! Point splitting: every field of every composite sits at its own
//! auxiliary bulk point, the derivatives of the composite act on the
//! propagators there (symbolic `Der` terms, differentiated by the
//! normaliser), and then every auxiliary point is set equal to the
//! insertion point. For a boundary insertion this sets y → 0 after the
//! normal derivatives are taken.

use std::collections::{BTreeMap, BTreeSet};

use super::{add, dist_pow, inv, minus, mul, normal_coord, pow, rational, sphere, unknown, Model};
use super::{describe_op, index_names, rename_indices, substitute_points};
use crate::context::{Context, DISPLACEMENT, STRESS_TENSOR};
use crate::diagnostic::Result;
use crate::normal::normalize_pointwise as normalize;
use crate::term::{Index, Op, Point, Term};

/// The boundary condition at y = 0.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Wall {
    /// ∂_nφ = 0: the image enters with +.
    Neumann,
    /// φ = 0: the image enters with -.
    Dirichlet,
}

impl Wall {
    fn sign(self) -> i64 {
        match self {
            Wall::Neumann => 1,
            Wall::Dirichlet => -1,
        }
    }

    pub fn describe(self) -> &'static str {
        match self {
            Wall::Neumann => "Neumann wall (∂_n φ = 0, image +)",
            Wall::Dirichlet => "Dirichlet wall (φ = 0, image -)",
        }
    }
}

/// The composite an operator name stands for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Composite {
    /// φ.
    Field,
    /// :φ²:, dimension d - 2.
    FieldSquared,
    /// T_{μν} (improved or not, as the model says).
    Stress,
    /// D = T_nn at the wall, with the model's ξ (0 for the unimproved T).
    Displacement,
    /// φ̂ = φ at y = 0 (zero for Dirichlet).
    BoundaryField,
    /// ∂_nφ at y = 0 (zero for Neumann).
    BoundaryNormalDerivative,
    /// :φ̂²: at y = 0, normal-ordered on the wall.
    BoundaryFieldSquared,
}

impl Composite {
    fn on_boundary(self) -> bool {
        matches!(
            self,
            Composite::Displacement
                | Composite::BoundaryField
                | Composite::BoundaryNormalDerivative
                | Composite::BoundaryFieldSquared
        )
    }

    fn rank(self) -> usize {
        match self {
            Composite::Stress => 2,
            _ => 0,
        }
    }

    pub fn describe(self) -> &'static str {
        match self {
            Composite::Field => "φ",
            Composite::FieldSquared => ":φ²:",
            Composite::Stress => "T_μν",
            Composite::Displacement => "D",
            Composite::BoundaryField => "φ̂",
            Composite::BoundaryNormalDerivative => "∂_n φ",
            Composite::BoundaryFieldSquared => ":φ̂²:",
        }
    }
}

/// Which operator name stands for which composite.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Mapping {
    names: BTreeMap<String, Composite>,
}

impl Default for Mapping {
    fn default() -> Mapping {
        Mapping::new()
    }
}

impl Mapping {
    /// T ↦ T_μν and D ↦ D.
    pub fn new() -> Mapping {
        Mapping {
            names: BTreeMap::from([
                (STRESS_TENSOR.to_string(), Composite::Stress),
                (DISPLACEMENT.to_string(), Composite::Displacement),
            ]),
        }
    }

    /// Adds (or replaces) one name.
    pub fn with(mut self, name: &str, composite: Composite) -> Mapping {
        self.names.insert(name.to_string(), composite);
        self
    }

    pub fn get(&self, name: &str) -> Option<Composite> {
        self.names.get(name).copied()
    }

    /// The names, in order, with their composites.
    pub fn iter(&self) -> impl Iterator<Item = (&str, Composite)> {
        self.names.iter().map(|(n, c)| (n.as_str(), *c))
    }
}

/// The normalisation of the propagator.
#[derive(Clone, Debug, PartialEq)]
pub enum Normalisation {
    /// C_φ = 1/((d-2) S_d): canonical kinetic term ½(∂φ)².
    Canonical,
    /// A given C_φ.
    Given(Term),
}

/// The free scalar.
#[derive(Clone, Debug)]
pub struct FreeScalar {
    /// `None` in R^d; the file must then declare no half-space.
    pub wall: Option<Wall>,
    /// Improved T (ξ = (d-2)/(4(d-1))) or the canonical one (ξ = 0).
    pub improved: bool,
    pub normalisation: Normalisation,
    pub mapping: Mapping,
}

const NAME: &str = "free-scalar";

/// One term of a composite: a coefficient (possibly with indices) times a
/// product of fields, each with the derivatives acting on it.
#[derive(Clone, Debug)]
struct Product {
    coef: Term,
    legs: Vec<Vec<Index>>,
}

/// One field of one insertion.
#[derive(Clone, Debug)]
struct Leg {
    op: usize,
    point: Point,
    derivs: Vec<Index>,
}

impl FreeScalar {
    /// Canonically normalised, improved T.
    pub fn new(wall: Option<Wall>, mapping: Mapping) -> FreeScalar {
        FreeScalar {
            wall,
            improved: true,
            normalisation: Normalisation::Canonical,
            mapping,
        }
    }

    /// The same model with the canonical (unimproved) stress tensor.
    pub fn unimproved(mut self) -> FreeScalar {
        self.improved = false;
        self
    }

    /// C_φ as a term.
    pub fn c_phi(&self, ctx: &Context) -> Term {
        match &self.normalisation {
            Normalisation::Canonical => {
                mul(vec![inv(minus(ctx.dim(), Term::int(2))), inv(sphere())])
            }
            Normalisation::Given(c) => c.clone(),
        }
    }

    /// The improvement coefficient ξ (0 for the unimproved T).
    pub fn xi(&self, ctx: &Context) -> Term {
        if self.improved {
            let d = ctx.dim();
            mul(vec![
                minus(d.clone(), Term::int(2)),
                inv(mul(vec![Term::int(4), minus(d, Term::one())])),
            ])
        } else {
            Term::zero()
        }
    }

    /// The composite as a sum of products of fields with derivatives.
    /// Summation indices carry the insertion's position `k`, so that two
    /// insertions never share one.
    fn expansion(&self, ctx: &Context, k: usize, op: &Op, c: Composite) -> Vec<Product> {
        let one = |coef: Term, legs: Vec<Vec<Index>>| Product { coef, legs };
        let dummy = |j: usize| Index::Named(format!("κw{k}_{j}"));
        let xi = self.xi(ctx);
        let two_xi = mul(vec![Term::int(2), xi.clone()]);
        match c {
            Composite::Field | Composite::BoundaryField => vec![one(Term::one(), vec![vec![]])],
            Composite::BoundaryNormalDerivative => vec![one(Term::one(), vec![vec![Index::N]])],
            Composite::FieldSquared | Composite::BoundaryFieldSquared => {
                vec![one(Term::one(), vec![vec![], vec![]])]
            }
            Composite::Stress => {
                let (i, j) = (op.indices[0].clone(), op.indices[1].clone());
                let kron = Term::Kron(i.clone(), j.clone());
                let (a, b) = (dummy(0), dummy(1));
                let mut out = vec![
                    // ∂_iφ ∂_jφ - ½ δ_ij ∂_aφ ∂_aφ
                    one(Term::one(), vec![vec![i.clone()], vec![j.clone()]]),
                    one(
                        mul(vec![rational(-1, 2), kron.clone()]),
                        vec![vec![a.clone()], vec![a]],
                    ),
                ];
                if self.improved {
                    // -ξ(∂_i∂_j - δ_ij ∂²)φ² with ∂_i∂_j φ² = 2∂_iφ∂_jφ + 2φ∂_i∂_jφ.
                    out.extend([
                        one(
                            two_xi.clone().negated(),
                            vec![vec![i.clone()], vec![j.clone()]],
                        ),
                        one(two_xi.clone().negated(), vec![vec![], vec![i, j]]),
                        one(
                            mul(vec![two_xi.clone(), kron.clone()]),
                            vec![vec![b.clone()], vec![b.clone()]],
                        ),
                        one(mul(vec![two_xi, kron]), vec![vec![], vec![b.clone(), b]]),
                    ]);
                }
                out
            }
            Composite::Displacement => match self.wall {
                Some(Wall::Dirichlet) | None => {
                    vec![one(rational(1, 2), vec![vec![Index::N], vec![Index::N]])]
                }
                Some(Wall::Neumann) => {
                    let (a, b) = (dummy(0), dummy(1));
                    let n = Index::N;
                    // -½ ∂_aφ̂ ∂_aφ̂ + ξ ∂_a∂_a φ̂², parallel a = all minus normal.
                    let mut out = vec![
                        one(rational(-1, 2), vec![vec![a.clone()], vec![a]]),
                        one(rational(1, 2), vec![vec![n.clone()], vec![n.clone()]]),
                    ];
                    if self.improved {
                        out.extend([
                            one(two_xi.clone(), vec![vec![b.clone()], vec![b.clone()]]),
                            one(
                                two_xi.clone().negated(),
                                vec![vec![n.clone()], vec![n.clone()]],
                            ),
                            one(two_xi.clone(), vec![vec![], vec![b.clone(), b]]),
                            one(two_xi.negated(), vec![vec![], vec![n.clone(), n]]),
                        ]);
                    }
                    out
                }
            },
        }
    }

    /// ⟨φ(a) φ(b)⟩ with the derivatives of both legs, as an explicit term
    /// at the insertion points, or `None` when the contraction is dropped (a
    /// self-contraction of a boundary composite, or of a bulk composite
    /// without a wall).
    ///
    /// The two fields sit at auxiliary bulk points while the derivatives are
    /// taken (so that the two ends of one propagator are differentiated
    /// separately, and normal derivatives are taken before a boundary
    /// insertion sets y = 0); then the auxiliary points are replaced by the
    /// insertion points.
    fn contraction(
        &self,
        ctx: &Context,
        ops: &[Op],
        a: &Leg,
        b: &Leg,
        boundary_op: bool,
    ) -> Result<Option<Term>> {
        let same = a.op == b.op;
        if same && boundary_op {
            return Ok(None);
        }
        let d = ctx.dim();
        let c = self.c_phi(ctx);
        let mut parts = Vec::new();
        if !same {
            parts.push(mul(vec![
                c.clone(),
                dist_pow(&a.point, &b.point, minus(Term::int(2), d.clone())),
            ]));
        }
        if let Some(wall) = self.wall {
            // |x - x̄'|² = |x - x'|² + 4 y y'
            let image = add(vec![
                dist_pow(&a.point, &b.point, Term::int(2)),
                mul(vec![
                    Term::int(4),
                    normal_coord(&a.point),
                    normal_coord(&b.point),
                ]),
            ]);
            parts.push(mul(vec![
                Term::int(wall.sign()),
                c,
                pow(image, mul(vec![rational(1, 2), minus(Term::int(2), d)])),
            ]));
        }
        if parts.is_empty() {
            return Ok(None);
        }
        let mut t = add(parts);
        for i in b.derivs.iter().rev() {
            t = Term::Der(i.clone(), b.point.clone(), Box::new(t));
        }
        for i in a.derivs.iter().rev() {
            t = Term::Der(i.clone(), a.point.clone(), Box::new(t));
        }
        let split = normalize(ctx, &t)?;
        let back = BTreeMap::from([
            (a.point.name.clone(), ops[a.op].point.clone()),
            (b.point.name.clone(), ops[b.op].point.clone()),
        ]);
        Ok(Some(normalize(ctx, &substitute_points(&split, &back))?))
    }

    fn check(&self, ctx: &Context, ops: &[Op]) -> Result<Vec<Composite>> {
        match (self.wall, ctx.has_halfspace()) {
            (Some(_), false) => {
                return Err(unknown(
                    NAME,
                    ops,
                    "the model has a wall but the file declares no half-space",
                ))
            }
            (None, true) => {
                return Err(unknown(
                    NAME,
                    ops,
                    "the file declares a half-space; choose a Neumann or a Dirichlet wall",
                ))
            }
            _ => {}
        }
        if ctx.dimension == Some(Term::int(2)) {
            return Err(unknown(
                NAME,
                ops,
                "in d = 2 the free scalar's propagator is a logarithm, not a power",
            ));
        }
        let mut out = Vec::with_capacity(ops.len());
        for (k, op) in ops.iter().enumerate() {
            let Some(c) = self.mapping.get(&op.name) else {
                let known: Vec<String> = self
                    .mapping
                    .iter()
                    .map(|(n, c)| format!("{n} = {}", c.describe()))
                    .collect();
                return Err(unknown(
                    NAME,
                    ops,
                    format!(
                        "no composite is mapped to {} (the mapping has {})",
                        op.name,
                        known.join(", ")
                    ),
                ));
            };
            if op.indices.len() != c.rank() {
                return Err(unknown(
                    NAME,
                    ops,
                    format!(
                        "{} stands for {}, which carries {} indices",
                        describe_op(op),
                        c.describe(),
                        c.rank()
                    ),
                ));
            }
            if c.on_boundary() && (self.wall.is_none() || !ctx.is_boundary_point(&op.point)) {
                return Err(unknown(
                    NAME,
                    ops,
                    format!(
                        "{} stands for the boundary operator {}, which lives at a \
                         boundary point next to a wall",
                        describe_op(op),
                        c.describe()
                    ),
                ));
            }
            for other in &ops[..k] {
                if other.point == op.point {
                    return Err(unknown(
                        NAME,
                        ops,
                        format!(
                            "{} and {} sit at the same point; coincident insertions \
                             are singular",
                            describe_op(other),
                            describe_op(op)
                        ),
                    ));
                }
            }
            out.push(c);
        }
        Ok(out)
    }
}

/// Every perfect matching of `legs`, as index pairs.
fn matchings(legs: &[usize]) -> Vec<Vec<(usize, usize)>> {
    let Some((&first, rest)) = legs.split_first() else {
        return vec![vec![]];
    };
    let mut out = Vec::new();
    for (k, &partner) in rest.iter().enumerate() {
        let mut others: Vec<usize> = rest.to_vec();
        others.remove(k);
        for mut m in matchings(&others) {
            m.insert(0, (first, partner));
            out.push(m);
        }
    }
    out
}

impl Model for FreeScalar {
    fn pointwise_inside(&self, ops: &[Op]) -> bool {
        ops.iter().any(|op| {
            matches!(
                self.mapping.get(&op.name),
                Some(
                    Composite::Stress
                        | Composite::Displacement
                        | Composite::BoundaryNormalDerivative
                )
            )
        })
    }

    fn describe(&self) -> String {
        let wall = match self.wall {
            Some(w) => w.describe(),
            None => "no boundary",
        };
        let t = if self.improved {
            "improved T, ξ = (d-2)/(4(d-1))"
        } else {
            "unimproved T, ξ = 0"
        };
        let norm = match &self.normalisation {
            Normalisation::Canonical => "C_φ = 1/((d-2) S_d)".to_string(),
            Normalisation::Given(_) => "C_φ given".to_string(),
        };
        format!(
            "free scalar, {wall}, {t}, {norm}; composites normal-ordered w.r.t. the vacuum \
             without boundary, boundary composites w.r.t. the boundary vacuum"
        )
    }

    fn correlator(&self, ctx: &Context, ops: &[Op]) -> Result<Term> {
        let composites = self.check(ctx, ops)?;
        if ops.is_empty() {
            return Ok(Term::one());
        }
        let expansions: Vec<Vec<Product>> = ops
            .iter()
            .zip(&composites)
            .enumerate()
            .map(|(k, (op, c))| self.expansion(ctx, k, op, *c))
            .collect();
        // Auxiliary points: field `slot` of insertion `k`. '#' cannot occur
        // in a declared name.
        let aux = |k: usize, slot: usize| Point {
            rank: ops[k].point.rank,
            par: false,
            name: format!("{}#{k}_{slot}", ops[k].point.name).into(),
        };
        // Contractions by (field, field, derivatives): many products share them.
        type Key = (crate::term::Name, crate::term::Name, Vec<Index>, Vec<Index>);
        let mut cache: BTreeMap<Key, Option<(Term, BTreeSet<String>)>> = BTreeMap::new();
        let mut sum = Vec::new();
        // Every choice of one product per insertion.
        let mut choice = vec![0usize; ops.len()];
        loop {
            let mut coef = Vec::new();
            let mut legs = Vec::new();
            for (k, products) in expansions.iter().enumerate() {
                let p = &products[choice[k]];
                coef.push(p.coef.clone());
                for (slot, derivs) in p.legs.iter().enumerate() {
                    legs.push(Leg {
                        op: k,
                        point: aux(k, slot),
                        derivs: derivs.clone(),
                    });
                }
            }
            if legs.len() % 2 == 0 {
                let all: Vec<usize> = (0..legs.len()).collect();
                'matching: for m in matchings(&all) {
                    let mut factors = coef.clone();
                    let mut fresh = 0usize;
                    for (a, b) in m {
                        let (a, b) = (&legs[a], &legs[b]);
                        let key = (
                            a.point.name.clone(),
                            b.point.name.clone(),
                            a.derivs.clone(),
                            b.derivs.clone(),
                        );
                        if !cache.contains_key(&key) {
                            let boundary = composites[a.op].on_boundary();
                            let value = self
                                .contraction(ctx, ops, a, b, boundary)?
                                .map(|t| (t.clone(), summed_names(&t, a, b)));
                            cache.insert(key.clone(), value);
                        }
                        let Some(Some((t, summed))) = cache.get(&key) else {
                            continue 'matching;
                        };
                        // Indices the normaliser summed inside this
                        // propagator: rename them apart from the others.
                        let map: BTreeMap<String, Index> = summed
                            .iter()
                            .map(|n| {
                                fresh += 1;
                                (n.clone(), Index::Named(format!("κf{fresh}")))
                            })
                            .collect();
                        factors.push(rename_indices(t, &map));
                    }
                    sum.push(mul(factors));
                }
            }
            // Next choice (odometer).
            let mut k = 0;
            loop {
                if k == ops.len() {
                    return normalize(ctx, &add(sum));
                }
                choice[k] += 1;
                if choice[k] < expansions[k].len() {
                    break;
                }
                choice[k] = 0;
                k += 1;
            }
        }
    }
}

/// The index names of a normalised propagator factor other than the free
/// derivative indices of its two fields: the ones summed inside it.
fn summed_names(t: &Term, a: &Leg, b: &Leg) -> BTreeSet<String> {
    let mut counts: BTreeMap<&str, usize> = BTreeMap::new();
    for i in a.derivs.iter().chain(&b.derivs) {
        if let Some(n) = i.name() {
            *counts.entry(n).or_insert(0) += 1;
        }
    }
    let mut all = BTreeSet::new();
    index_names(t, &mut all);
    all.into_iter()
        .filter(|n| counts.get(n.as_str()) != Some(&1))
        .collect()
}
