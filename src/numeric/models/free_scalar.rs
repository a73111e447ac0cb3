//! The free massless scalar φ in R^d, or in the half-space y ≥ 0 with a
//! Neumann (+) or Dirichlet (-) wall, or a wall with reflection
//! coefficient ρ, by Wick contraction.
//!
//! Propagator, by the method of images (docs/conventions.md §4, common practice):
//!
//!   G(x, x') = C_φ ( |x - x'|^{2-d} ± |x - x̄'|^{2-d} ),  C_φ = 1/((d-2) S_d),
//!
//! and with a reflecting wall ρ in place of ±: the wall coupled to a
//! boundary generalised free field χ of the marginal dimension, χ
//! integrated out (docs/conventions.md §11, derived). χ itself is ∂_nφ/g
//! (from the Neumann side) or -φ̂/g (from the Dirichlet side) inside
//! correlators; its contractions carry the factors of g that keep them
//! finite at g = 0, where χ is the free generalised free field.
//!
//! with |x - x̄'|² = |x - x'|² + 4 y y' written as a sum in the term (a power
//! of a sum is a scalar atom of the normal form).
//!
//! Operators are composites of φ, named by a [`Mapping`] (T and D by
//! default): φ, :φ²:, the stress tensor
//!
//!   T_{μν} = ∂_μφ∂_νφ - ½δ_{μν}(∂φ)² - ξ(∂_μ∂_ν - δ_{μν}∂²)φ²,
//!   ξ = (d-2)/(4(d-1)) improved, ξ = 0 unimproved (a setting),
//!
//! the displacement operator D = T_nn at the wall (docs/conventions.md §4, derived):
//! ½(∂_nφ)² for Dirichlet, -½(∂_aφ̂)² + ξ ∂_a∂_a φ̂² for Neumann (the sums
//! over parallel a written as bulk sums minus the normal term), their sum
//! for a reflecting wall, T_{nμ} at y → 0+ (whose parallel part is the flux
//! of parallel momentum into the wall), the boundary values φ̂, ∂_nφ and
//! :φ̂²:, and χ.
//!
//! Normal ordering: bulk composites are normal-ordered with respect to the
//! vacuum without a boundary, so a self-contraction keeps only the image
//! term (⟨φ²(x)⟩ = ± C_φ/(2y)^{d-2}); boundary composites are normal-ordered
//! with respect to the boundary vacuum, so their self-contractions are
//! dropped (⟨D⟩ = 0 = lim ⟨T_nn⟩, and ⟨φ̂²⟩ would otherwise diverge).
//!
//! Point splitting: every field of every composite sits at its own
//! auxiliary bulk point, the derivatives of the composite act on the
//! propagators there (in closed form, [`super::propagator`]: no symbolic
//! derivative is left for the normaliser), and then every auxiliary point
//! is set equal to the insertion point. For a boundary insertion this sets
//! y → 0 after the normal derivatives are taken.
//!
//! Work done once: each contraction is computed (and normalised) once per
//! pair of insertions and derivative structure, whatever the names of the
//! indices (renamed on use); terms of a composite with the same fields and
//! derivatives are merged before contraction; two interchangeable fields of
//! one insertion are paired once, with weight 2. The pairings are
//! enumerated depth first within [`crate::budget::MAX_WICK`].

use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::sync::{Arc, Mutex};

use super::propagator::{derivative, Part};
use super::{add, inv, minus, mul, pow, rational, sphere, unknown, Model};
use super::{describe_op, index_names, node_count, rename_indices, substitute_points};
use crate::budget::Pairings;
use crate::context::{Context, DISPLACEMENT, STRESS_TENSOR};
use crate::diagnostic::Result;
use crate::normal::{normalize_pointwise as normalize, normalize_products_pointwise};
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
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
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
    /// T_{nμ} at y → 0+ (one index): D for μ = n, the flux of parallel
    /// momentum into the wall for μ parallel.
    WallStress,
    /// The boundary field χ of a coupled wall.
    Chi,
    /// φ̄, the conjugate of the complex field (complex model only).
    FieldBar,
    /// The U(1) current J_μ = ∂_μφ̄ φ - φ̄∂_μφ of the complex field.
    Current,
    /// J_μ at y → 0+, a boundary vector normal-ordered on the wall (complex
    /// field next to a Neumann or Dirichlet wall).
    BoundaryCurrent,
}

impl Composite {
    fn on_boundary(self) -> bool {
        matches!(
            self,
            Composite::Displacement
                | Composite::BoundaryField
                | Composite::BoundaryNormalDerivative
                | Composite::BoundaryFieldSquared
                | Composite::WallStress
                | Composite::Chi
                | Composite::BoundaryCurrent
        )
    }

    fn rank(self) -> usize {
        match self {
            Composite::Stress => 2,
            Composite::WallStress | Composite::Current | Composite::BoundaryCurrent => 1,
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
            Composite::WallStress => "T_nμ at the wall",
            Composite::Chi => "χ",
            Composite::FieldBar => "φ̄",
            Composite::Current => "J_μ",
            Composite::BoundaryCurrent => "J_μ at the wall",
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

/// A wall with reflection coefficient ρ: the image enters with ρ
/// (docs/conventions.md §11).
#[derive(Clone, Debug)]
pub struct Reflection {
    /// ρ, a term in the parameters.
    pub rho: Term,
    /// The boundary field the wall is coupled to, when there is one.
    pub chi: Option<Chi>,
}

/// The boundary generalised free field χ of a coupled wall, unit-normalised
/// at g = 0: ⟨χ(s) χ(s')⟩ = 1/|s - s'|^{2Δ_χ}.
#[derive(Clone, Debug)]
pub struct Chi {
    /// `Neumann`: χ of dimension d/2 coupled to φ̂, χ = ∂_nφ/g;
    /// `Dirichlet`: χ of dimension d/2 - 1 coupled to ∂_nφ, χ = -φ̂/g.
    pub side: Wall,
    /// The factor of a contraction of χ with φ: (1 - ρ)/(2g) or -(1 + ρ)/(2g).
    one: Term,
    /// The factor of a contraction of χ with χ: (1 - ρ)/(2g²) or (1 + ρ)/(2g²).
    two: Term,
}

impl Reflection {
    /// ρ given, no χ.
    pub fn constant(rho: Term) -> Reflection {
        Reflection { rho, chi: None }
    }

    /// The wall of `side` coupled with strength g to χ of the marginal
    /// dimension, S = ½∫(∂φ)² + g∫ φ̂ χ (Neumann side) or g∫ χ ∂_nφ
    /// (Dirichlet side), χ integrated out (docs/conventions.md §11, derived):
    /// with u = g² S_d/2 (Neumann side) or u = g² (d-2) S_d/2 (Dirichlet
    /// side), ρ = ±(1 - u)/(1 + u).
    pub fn coupled(side: Wall, g: Term, ctx: &Context) -> Reflection {
        let g2 = pow(g.clone(), Term::int(2));
        // 2u = g² S_d or g² (d - 2) S_d; k = S_d or (d - 2) S_d.
        let k = match side {
            Wall::Neumann => sphere(),
            Wall::Dirichlet => mul(vec![minus(ctx.dim(), Term::int(2)), sphere()]),
        };
        let two_u = mul(vec![g2, k.clone()]);
        let over = inv(add(vec![Term::int(2), two_u.clone()]));
        // ρ = (2 - 2u)/(2 + 2u), times -1 from the Dirichlet side.
        let rho = mul(vec![
            Term::int(side.sign()),
            minus(Term::int(2), two_u),
            over.clone(),
        ]);
        // Neumann side: (1 - ρ)/2 = u/(1 + u), so (1 - ρ)/(2g) = g k/(2 + 2u)
        // and (1 - ρ)/(2g²) = k/(2 + 2u). Dirichlet side: (1 + ρ)/2 = u/(1 + u),
        // χ = -φ̂/g: -(1 + ρ)/(2g) = -g k/(2 + 2u), (1 + ρ)/(2g²) = k/(2 + 2u).
        let one = mul(vec![Term::int(side.sign()), g, k.clone(), over.clone()]);
        let two = mul(vec![k, over]);
        Reflection {
            rho,
            chi: Some(Chi { side, one, two }),
        }
    }
}

/// The free scalar.
#[derive(Clone, Debug)]
pub struct FreeScalar {
    /// `None` in R^d (or with a reflecting wall); without a reflection the
    /// file must then declare no half-space.
    pub wall: Option<Wall>,
    /// A wall with reflection coefficient ρ, in place of `wall`.
    pub reflection: Option<Reflection>,
    /// Improved T (ξ = (d-2)/(4(d-1))) or the canonical one (ξ = 0).
    pub improved: bool,
    pub normalisation: Normalisation,
    pub mapping: Mapping,
    /// The complex field φ = (φ₁ + iφ₂)/√2 of two canonical real ones
    /// instead of one real field: φ names φ, φ2 names :φ̄φ:, T is the sum
    /// of the two real T's, and φ̄ and J are there too.
    pub complex: bool,
    /// Work remembered between correlators (see [`FreeScalar::remembering`]);
    /// `None` remembers nothing past one correlator.
    memory: Option<Arc<Memory>>,
}

/// Correlators and contractions already worked out by a model that serves
/// one file (one [`Context`]): the same correlator asked again (⟨D D D⟩
/// for C_DDD and for b1), and the same contraction in another correlator
/// (⟨∂φ(s1) ∂φ(s2)⟩ of ⟨D D⟩ inside ⟨D D D⟩), are not worked out again.
#[derive(Debug, Default)]
struct Memory {
    correlators: Mutex<HashMap<Vec<Op>, Term>>,
    contractions: Mutex<HashMap<SharedKey, Option<Contracted>>>,
}

/// What determines a contraction across correlators: each end's point and
/// composite, and the derivatives on each end with index names replaced by
/// their order of first appearance.
type SharedKey = (Point, Composite, Point, Composite, Vec<Vec<Index>>);

/// Which field a leg is: the real φ, or the complex φ or φ̄. Only φ with
/// φ̄ (and real with real) contract: ⟨φ φ⟩ = 0 for the complex field.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
enum Flavour {
    Real,
    Phi,
    Bar,
}

impl Flavour {
    fn contracts_with(self, other: Flavour) -> bool {
        matches!(
            (self, other),
            (Flavour::Real, Flavour::Real)
                | (Flavour::Phi, Flavour::Bar)
                | (Flavour::Bar, Flavour::Phi)
        )
    }
}

const NAME: &str = "free-scalar";

/// One term of a composite: a coefficient (possibly with indices) times a
/// product of fields, each with the derivatives acting on it.
#[derive(Clone, Debug)]
struct Product {
    coef: Term,
    legs: Vec<Vec<Index>>,
    /// The field of each leg.
    flavours: Vec<Flavour>,
}

/// One field of one insertion, with the derivatives acting on it.
#[derive(Clone, Debug)]
struct Leg {
    op: usize,
    derivs: Vec<Index>,
    flavour: Flavour,
}

impl FreeScalar {
    /// Canonically normalised, improved T.
    pub fn new(wall: Option<Wall>, mapping: Mapping) -> FreeScalar {
        FreeScalar {
            wall,
            reflection: None,
            improved: true,
            normalisation: Normalisation::Canonical,
            mapping,
            complex: false,
            memory: None,
        }
    }

    /// The same model remembering correlators and contractions between
    /// calls. Only for a model that serves one file: what it remembers
    /// holds for the declarations (the context) of that file.
    pub fn remembering(mut self) -> FreeScalar {
        self.memory = Some(Arc::default());
        self
    }

    /// The complex scalar instead of the real one.
    pub fn complex(mut self) -> FreeScalar {
        self.complex = true;
        self
    }

    /// Canonically normalised, improved T, next to a reflecting wall.
    pub fn reflecting(reflection: Reflection, mapping: Mapping) -> FreeScalar {
        FreeScalar {
            reflection: Some(reflection),
            ..FreeScalar::new(None, mapping)
        }
    }

    /// True next to a wall of any kind.
    fn has_wall(&self) -> bool {
        self.wall.is_some() || self.reflection.is_some()
    }

    /// The coefficient of the image term: ±1 or ρ; `None` without a wall.
    fn image(&self) -> Option<Term> {
        match (&self.reflection, self.wall) {
            (Some(r), _) => Some(r.rho.clone()),
            (None, Some(w)) => Some(Term::int(w.sign())),
            (None, None) => None,
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
        let one = |coef: Term, legs: Vec<Vec<Index>>| Product::real(coef, legs);
        if self.complex {
            let field = |f: Flavour, derivs: Vec<Index>| Product {
                coef: Term::one(),
                legs: vec![derivs],
                flavours: vec![f],
            };
            match c {
                Composite::Field => return vec![field(Flavour::Phi, vec![])],
                Composite::FieldBar => return vec![field(Flavour::Bar, vec![])],
                Composite::FieldSquared => {
                    return vec![Product::complex(Term::one(), vec![], vec![])]
                }
                Composite::Current | Composite::BoundaryCurrent => {
                    let i = op.indices[0].clone();
                    return vec![
                        Product::complex(Term::one(), vec![i.clone()], vec![]),
                        Product::complex(Term::int(-1), vec![], vec![i]),
                    ];
                }
                Composite::Stress => {
                    return self.complex_stress(
                        ctx,
                        k,
                        op.indices[0].clone(),
                        op.indices[1].clone(),
                    )
                }
                // T_nn and T_nμ at y → 0+ (the sum of the two real D's:
                // ∂_nφ̄∂_nφ for Dirichlet, -∂_aφ̄∂_aφ + 2ξ∂_a∂_a(φ̄φ) for
                // Neumann, once the wall's condition is used).
                Composite::Displacement => return self.complex_stress(ctx, k, Index::N, Index::N),
                Composite::WallStress => {
                    return self.complex_stress(ctx, k, Index::N, op.indices[0].clone())
                }
                _ => {}
            }
        }
        match c {
            // Only in the complex model (`check` refuses them otherwise).
            Composite::FieldBar | Composite::Current | Composite::BoundaryCurrent => vec![],
            Composite::Field | Composite::BoundaryField => vec![one(Term::one(), vec![vec![]])],
            Composite::BoundaryNormalDerivative => vec![one(Term::one(), vec![vec![Index::N]])],
            Composite::FieldSquared | Composite::BoundaryFieldSquared => {
                vec![one(Term::one(), vec![vec![], vec![]])]
            }
            Composite::Stress => self.stress(ctx, k, op.indices[0].clone(), op.indices[1].clone()),
            Composite::WallStress => self.stress(ctx, k, Index::N, op.indices[0].clone()),
            Composite::Chi => match self.reflection.as_ref().and_then(|r| r.chi.as_ref()) {
                // χ = ∂_nφ/g or -φ̂/g: the factors are in the contraction.
                Some(Chi {
                    side: Wall::Neumann,
                    ..
                }) => vec![one(Term::one(), vec![vec![Index::N]])],
                _ => vec![one(Term::one(), vec![vec![]])],
            },
            Composite::Displacement if self.reflection.is_some() => {
                // T_nn at the wall = ½(∂_nφ)² - ½(∂_aφ)² + ξ∂_a∂_aφ²: the
                // Neumann form below plus ½(∂_nφ)².
                let mut out = self.displacement_neumann(ctx, k);
                out.push(one(rational(1, 2), vec![vec![Index::N], vec![Index::N]]));
                out
            }
            Composite::Displacement => match self.wall {
                Some(Wall::Dirichlet) | None => {
                    vec![one(rational(1, 2), vec![vec![Index::N], vec![Index::N]])]
                }
                Some(Wall::Neumann) => self.displacement_neumann(ctx, k),
            },
        }
    }

    /// T_ij of insertion `k` as products of fields.
    fn stress(&self, ctx: &Context, k: usize, i: Index, j: Index) -> Vec<Product> {
        let one = |coef: Term, legs: Vec<Vec<Index>>| Product::real(coef, legs);
        let dummy = |j: usize| Index::Named(format!("κw{k}_{j}"));
        let two_xi = mul(vec![Term::int(2), self.xi(ctx)]);
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

    /// T_ij of the complex field (the sum of the two real T's), insertion
    /// `k`, as products φ̄ × φ (docs/conventions.md §13):
    ///
    ///   T_ij = (1 - 2ξ)(∂_iφ̄∂_jφ + ∂_jφ̄∂_iφ) - 2ξ(φ̄∂_i∂_jφ + ∂_i∂_jφ̄ φ)
    ///          - δ_ij ∂_aφ̄∂_aφ + 2ξ δ_ij (2∂_bφ̄∂_bφ + φ̄∂²φ + ∂²φ̄ φ).
    fn complex_stress(&self, ctx: &Context, k: usize, i: Index, j: Index) -> Vec<Product> {
        let dummy = |j: usize| Index::Named(format!("κw{k}_{j}"));
        let xi = self.xi(ctx);
        let two_xi = mul(vec![Term::int(2), xi]);
        let one_minus = minus(Term::one(), two_xi.clone());
        let kron = Term::Kron(i.clone(), j.clone());
        let (a, b) = (dummy(0), dummy(1));
        let c = Product::complex;
        let mut out = vec![
            c(one_minus.clone(), vec![i.clone()], vec![j.clone()]),
            c(one_minus, vec![j.clone()], vec![i.clone()]),
            c(kron.clone().negated(), vec![a.clone()], vec![a]),
        ];
        if self.improved {
            out.extend([
                c(two_xi.clone().negated(), vec![], vec![i.clone(), j.clone()]),
                c(two_xi.clone().negated(), vec![i, j], vec![]),
                c(
                    mul(vec![Term::int(2), two_xi.clone(), kron.clone()]),
                    vec![b.clone()],
                    vec![b.clone()],
                ),
                c(
                    mul(vec![two_xi.clone(), kron.clone()]),
                    vec![],
                    vec![b.clone(), b.clone()],
                ),
                c(mul(vec![two_xi, kron]), vec![b.clone(), b], vec![]),
            ]);
        }
        out
    }

    /// -½ ∂_aφ̂ ∂_aφ̂ + ξ ∂_a∂_a φ̂² of insertion `k`, parallel a written as
    /// all directions minus the normal one: D of the Neumann wall.
    fn displacement_neumann(&self, ctx: &Context, k: usize) -> Vec<Product> {
        let one = |coef: Term, legs: Vec<Vec<Index>>| Product::real(coef, legs);
        let dummy = |j: usize| Index::Named(format!("κw{k}_{j}"));
        let two_xi = mul(vec![Term::int(2), self.xi(ctx)]);
        let (a, b) = (dummy(0), dummy(1));
        let n = Index::N;
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

    /// ⟨φ(a) φ(b)⟩ with the derivatives of both legs, as an explicit term
    /// at the insertion points, or `None` when the contraction is dropped (a
    /// self-contraction of a boundary composite, or of a bulk composite
    /// without a wall).
    ///
    /// The two fields sit at auxiliary bulk points while the derivatives are
    /// taken (so that the two ends of one propagator are differentiated
    /// separately, and normal derivatives are taken before a boundary
    /// insertion sets y = 0); then the auxiliary points are replaced by the
    /// insertion points. The derivatives are written in closed form
    /// ([`super::propagator`]), so the term is normalised once, at the
    /// insertion points, with no symbolic derivative in it.
    fn contraction(
        &self,
        ctx: &Context,
        ops: &[Op],
        (a_op, a_derivs): (usize, &[Index]),
        (b_op, b_derivs): (usize, &[Index]),
        (a_comp, b_comp): (Composite, Composite),
    ) -> Result<Option<Term>> {
        let boundary_op = a_comp.on_boundary();
        // Auxiliary points; '#' cannot occur in a declared name.
        let aux = |k: usize, end: &str| Point {
            rank: ops[k].point.rank,
            par: false,
            name: format!("{}#{k}{end}", ops[k].point.name).into(),
        };
        let (a, b) = (
            Leg2 {
                op: a_op,
                point: aux(a_op, "a"),
                derivs: a_derivs,
            },
            Leg2 {
                op: b_op,
                point: aux(b_op, "b"),
                derivs: b_derivs,
            },
        );
        let same = a.op == b.op;
        if same && boundary_op {
            return Ok(None);
        }
        let d = ctx.dim();
        let mut c = self.c_phi(ctx);
        // The image's coefficient; a contraction with χ is that of ∂_nφ or
        // φ̂ at the wall, (1 ∓ ρ)/2 times the Dirichlet or Neumann one, with
        // its powers of g (docs/conventions.md §11).
        let mut image = self.image();
        let chis = [a_comp, b_comp]
            .iter()
            .filter(|c| **c == Composite::Chi)
            .count();
        if chis > 0 {
            let Some(chi) = self.reflection.as_ref().and_then(|r| r.chi.as_ref()) else {
                return Err(unknown(NAME, ops, "χ needs a coupled wall"));
            };
            image = Some(Term::int(-chi.side.sign()));
            let weight = if chis == 2 { &chi.two } else { &chi.one };
            c = mul(vec![weight.clone(), c]);
        }
        // The derivatives in closed form (propagator.rs) at the auxiliary
        // points, which then become the insertion points.
        let mut parts = Vec::new();
        if !same {
            parts.push(mul(vec![
                c.clone(),
                derivative(Part::Direct, &a.point, &b.point, a.derivs, b.derivs, &d),
            ]));
        }
        if let Some(sign) = image {
            parts.push(mul(vec![
                sign,
                c,
                derivative(Part::Image, &a.point, &b.point, a.derivs, b.derivs, &d),
            ]));
        }
        if parts.is_empty() {
            return Ok(None);
        }
        let back = BTreeMap::from([
            (a.point.name.clone(), ops[a.op].point.clone()),
            (b.point.name.clone(), ops[b.op].point.clone()),
        ]);
        Ok(Some(normalize(
            ctx,
            &substitute_points(&add(parts), &back),
        )?))
    }

    fn check(&self, ctx: &Context, ops: &[Op]) -> Result<Vec<Composite>> {
        match (self.has_wall(), ctx.has_halfspace()) {
            (true, false) => {
                return Err(unknown(
                    NAME,
                    ops,
                    "the model has a wall but the file declares no half-space",
                ))
            }
            (false, true) => {
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
            if c == Composite::Chi
                && self
                    .reflection
                    .as_ref()
                    .and_then(|r| r.chi.as_ref())
                    .is_none()
            {
                return Err(unknown(
                    NAME,
                    ops,
                    format!(
                        "{} stands for χ, and this wall is coupled to no boundary field",
                        describe_op(op)
                    ),
                ));
            }
            if c.on_boundary() && (!self.has_wall() || !ctx.is_boundary_point(&op.point)) {
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
            let complex_only = matches!(
                c,
                Composite::FieldBar | Composite::Current | Composite::BoundaryCurrent
            );
            if complex_only && !self.complex {
                return Err(unknown(
                    NAME,
                    ops,
                    format!("{} belongs to the complex scalar", c.describe()),
                ));
            }
            // The complex field next to a Neumann or Dirichlet wall: each
            // real component has the image term, so ⟨φ φ̄⟩ has it too.
            if self.complex && self.reflection.is_some() {
                return Err(unknown(
                    NAME,
                    ops,
                    "the complex scalar is modelled without a wall or with a Neumann or \
                     Dirichlet wall, not with a reflecting one",
                ));
            }
            let complex_boundary = matches!(
                c,
                Composite::Displacement | Composite::WallStress | Composite::BoundaryCurrent
            );
            if self.complex && c.on_boundary() && !complex_boundary {
                return Err(unknown(
                    NAME,
                    ops,
                    format!(
                        "{} belongs to the real scalar; the complex one has D, T_nμ and J_μ \
                         at the wall",
                        c.describe()
                    ),
                ));
            }
            out.push(c);
        }
        Ok(out)
    }
}

impl Product {
    /// A product of real fields.
    fn real(coef: Term, legs: Vec<Vec<Index>>) -> Product {
        let flavours = vec![Flavour::Real; legs.len()];
        Product {
            coef,
            legs,
            flavours,
        }
    }

    /// coef × (∂…φ̄)(∂…φ): one φ̄ leg and one φ leg.
    fn complex(coef: Term, bar: Vec<Index>, phi: Vec<Index>) -> Product {
        Product {
            coef,
            legs: vec![bar, phi],
            flavours: vec![Flavour::Bar, Flavour::Phi],
        }
    }
}

/// One end of a contraction while its derivatives are taken: the
/// insertion, the auxiliary point standing for it, the derivatives.
struct Leg2<'a> {
    op: usize,
    point: Point,
    derivs: &'a [Index],
}

impl Model for FreeScalar {
    fn pointwise_inside(&self, ops: &[Op]) -> bool {
        ops.iter().any(|op| {
            matches!(
                self.mapping.get(&op.name),
                Some(
                    Composite::Stress
                        | Composite::Current
                        | Composite::BoundaryCurrent
                        | Composite::Displacement
                        | Composite::BoundaryNormalDerivative
                        | Composite::WallStress
                        | Composite::Chi
                )
            )
        })
    }

    fn describe(&self) -> String {
        let reflecting;
        let wall = match (&self.reflection, self.wall) {
            (Some(r), _) => {
                reflecting = match &r.chi {
                    None => "wall with reflection coefficient ρ (image × ρ)".to_string(),
                    Some(Chi {
                        side: Wall::Neumann,
                        ..
                    }) => "wall coupled to χ of dimension d/2 by g∫φ̂χ, ρ = (2 - g² S_d)/(2 + g² S_d), χ = ∂_n φ/g".to_string(),
                    Some(_) => "wall coupled to χ of dimension d/2 - 1 by g∫χ∂_nφ, ρ = -(2 - g² (d-2) S_d)/(2 + g² (d-2) S_d), χ = -φ̂/g".to_string(),
                };
                reflecting.as_str()
            }
            (None, Some(w)) => w.describe(),
            (None, None) => "no boundary",
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
        let field = if self.complex {
            "complex free scalar φ = (φ₁ + iφ₂)/√2, ⟨φ φ̄⟩ = C_φ/|x|^(d-2), J_μ = ∂_μφ̄ φ - φ̄∂_μφ"
        } else {
            "free scalar"
        };
        format!(
            "{field}, {wall}, {t}, {norm}; composites normal-ordered w.r.t. the vacuum \
             without boundary, boundary composites w.r.t. the boundary vacuum"
        )
    }

    fn correlator(&self, ctx: &Context, ops: &[Op]) -> Result<Term> {
        if let Some(memory) = &self.memory {
            let known = memory
                .correlators
                .lock()
                .ok()
                .and_then(|m| m.get(ops).cloned());
            if let Some(t) = known {
                return Ok(t);
            }
        }
        let t = self.correlator_uncached(ctx, ops)?;
        if let Some(memory) = &self.memory {
            if let Ok(mut m) = memory.correlators.lock() {
                m.insert(ops.to_vec(), t.clone());
            }
        }
        Ok(t)
    }
}

impl FreeScalar {
    /// The Wick expansion of one correlator, in normal form.
    fn correlator_uncached(&self, ctx: &Context, ops: &[Op]) -> Result<Term> {
        let composites = self.check(ctx, ops)?;
        if ops.is_empty() {
            return Ok(Term::one());
        }
        let expansions: Vec<Vec<Product>> = ops
            .iter()
            .zip(&composites)
            .enumerate()
            .map(|(k, (op, c))| merge_products(self.expansion(ctx, k, op, *c)))
            .collect();
        let mut wick = Wick {
            model: self,
            ctx,
            ops,
            composites: &composites,
            cache: BTreeMap::new(),
            budget: Pairings::default(),
        };
        let mut sum = Vec::new();
        // Every choice of one product per insertion.
        let mut choice = vec![0usize; ops.len()];
        loop {
            let mut coef = Vec::new();
            let mut legs = Vec::new();
            for (k, products) in expansions.iter().enumerate() {
                let p = &products[choice[k]];
                coef.push(p.coef.clone());
                for (derivs, flavour) in p.legs.iter().zip(&p.flavours) {
                    legs.push(Leg {
                        op: k,
                        derivs: derivs.clone(),
                        flavour: *flavour,
                    });
                }
            }
            if legs.len() % 2 == 0 {
                let mut used = vec![false; legs.len()];
                let mut factors = coef;
                wick.pair(&legs, &mut used, 1, &mut factors, &mut sum)?;
            }
            // Next choice (odometer).
            let mut k = 0;
            loop {
                if k == ops.len() {
                    return normalize_products_pointwise(ctx, &sum);
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

/// The terms of a composite with the same fields and derivatives, up to
/// the names of the composite's own summed indices, as one term with the
/// sum of their coefficients: ∂_iφ∂_jφ and -2ξ ∂_iφ∂_jφ of the improved T
/// are contracted once, not twice.
fn merge_products(products: Vec<Product>) -> Vec<Product> {
    // (the legs with the composite's dummies renamed, the coefficients,
    // the first product's own legs)
    type Group = ((Vec<Vec<Index>>, Vec<Flavour>), Vec<Term>, Vec<Vec<Index>>);
    let mut out: Vec<Group> = Vec::new();
    for p in products {
        let shape = (own_dummies_renamed(&p.legs), p.flavours.clone());
        match out.iter_mut().find(|(s, _, _)| *s == shape) {
            Some((_, coefs, _)) => coefs.push(p.coef),
            None => out.push((shape, vec![p.coef], p.legs)),
        }
    }
    out.into_iter()
        .map(|((_, flavours), mut coefs, legs)| Product {
            coef: if coefs.len() == 1 {
                coefs.pop().unwrap_or_else(Term::one)
            } else {
                add(coefs)
            },
            legs,
            flavours,
        })
        .collect()
}

/// Derivative lists with the composite's own summed indices (`κw…`)
/// renamed in order of first appearance, the free indices kept: ∂_iφ̄∂_jφ
/// and ∂_jφ̄∂_iφ of the complex T stay apart.
fn own_dummies_renamed(legs: &[Vec<Index>]) -> Vec<Vec<Index>> {
    let mut names: Vec<String> = Vec::new();
    legs.iter()
        .map(|derivs| {
            derivs
                .iter()
                .map(|i| match i {
                    Index::Named(n) if n.starts_with('κ') => {
                        let k = match names.iter().position(|m| m == n) {
                            Some(k) => k,
                            None => {
                                names.push(n.clone());
                                names.len() - 1
                            }
                        };
                        Index::Named(format!("κd{}", k + 1))
                    }
                    other => other.clone(),
                })
                .collect()
        })
        .collect()
}

/// Derivative lists with their named indices renamed to `κs1`, `κs2`, … in
/// order of first appearance, and the names in that order.
fn shape(legs: &[Vec<Index>]) -> (Vec<Vec<Index>>, Vec<String>) {
    let mut names: Vec<String> = Vec::new();
    let mut rename = |i: &Index| match i {
        Index::Named(n) => {
            let k = match names.iter().position(|m| m == n) {
                Some(k) => k,
                None => {
                    names.push(n.clone());
                    names.len() - 1
                }
            };
            Index::Named(format!("κs{}", k + 1))
        }
        Index::N => Index::N,
    };
    let out = legs
        .iter()
        .map(|derivs| derivs.iter().map(&mut rename).collect())
        .collect();
    (out, names)
}

/// What determines a contraction: the two insertions (by position) and the
/// derivatives on each end, with index names replaced by their order of
/// first appearance.
type Key = (usize, usize, Vec<Vec<Index>>);

/// A contraction computed once for its [`Key`]: the propagator with the
/// derivatives taken, at the insertion points, written with the key's
/// index names; and the names summed inside it.
#[derive(Clone, Debug)]
struct Contracted {
    term: Term,
    summed: BTreeSet<String>,
}

/// The Wick expansion of one correlator: the contraction cache and the
/// contraction budget.
struct Wick<'a> {
    model: &'a FreeScalar,
    ctx: &'a Context,
    ops: &'a [Op],
    composites: &'a [Composite],
    cache: BTreeMap<Key, Option<Contracted>>,
    budget: Pairings,
}

impl Wick<'_> {
    /// Pairs the first free leg with each later free one, in order (a
    /// dropped contraction ends the branch), and pushes one product per
    /// complete pairing onto `sum`: `weight` times `factors` times the
    /// propagators. Two free legs of one insertion with the same
    /// derivatives are interchangeable: the pairings that differ by
    /// swapping them give the same product, which is built once with their
    /// number as its weight.
    fn pair(
        &mut self,
        legs: &[Leg],
        used: &mut [bool],
        weight: i64,
        factors: &mut Vec<Term>,
        sum: &mut Vec<Vec<Term>>,
    ) -> Result<()> {
        let Some(first) = used.iter().position(|u| !u) else {
            let mut product = Vec::with_capacity(factors.len() + 1);
            if weight != 1 {
                product.push(Term::int(weight));
            }
            product.extend(factors.iter().cloned());
            // The nodes of the product written as one term.
            self.budget
                .build(1 + product.iter().map(node_count).sum::<usize>())?;
            sum.push(product);
            return Ok(());
        };
        used[first] = true;
        let twins = |p: usize, q: usize| {
            legs[p].op == legs[q].op
                && legs[p].derivs == legs[q].derivs
                && legs[p].flavour == legs[q].flavour
        };
        for partner in first + 1..legs.len() {
            if used[partner] || (first + 1..partner).any(|q| !used[q] && twins(q, partner)) {
                continue;
            }
            if !legs[first].flavour.contracts_with(legs[partner].flavour) {
                continue;
            }
            self.budget.place()?;
            let Some(factor) = self.factor(&legs[first], &legs[partner], factors.len())? else {
                continue;
            };
            let copies = (partner..legs.len())
                .filter(|&q| !used[q] && twins(q, partner))
                .count() as i64;
            used[partner] = true;
            factors.push(factor);
            let done = self.pair(legs, used, weight * copies, factors, sum);
            factors.pop();
            used[partner] = false;
            done?;
        }
        used[first] = false;
        Ok(())
    }

    /// The contraction of two legs with its own indices: the derivative
    /// indices of the legs, and fresh names `κf…` for the ones summed inside
    /// it (`position` tells the factors of one product apart). `None` when
    /// the contraction is dropped.
    fn factor(&mut self, a: &Leg, b: &Leg, position: usize) -> Result<Option<Term>> {
        let (shape, names) = shape(&[a.derivs.clone(), b.derivs.clone()]);
        let key: Key = (a.op, b.op, shape);
        if !self.cache.contains_key(&key) {
            let comps = (self.composites[a.op], self.composites[b.op]);
            let shared: SharedKey = (
                self.ops[a.op].point.clone(),
                comps.0,
                self.ops[b.op].point.clone(),
                comps.1,
                key.2.clone(),
            );
            let memory = self.model.memory.as_ref();
            let known = memory.and_then(|m| {
                m.contractions
                    .lock()
                    .ok()
                    .and_then(|c| c.get(&shared).cloned())
            });
            let value = match known {
                Some(value) => value,
                None => {
                    let (da, db) = (&key.2[0], &key.2[1]);
                    let value = self
                        .model
                        .contraction(self.ctx, self.ops, (a.op, da), (b.op, db), comps)?
                        .map(|term| {
                            let summed = summed_names(&term, da, db);
                            Contracted { term, summed }
                        });
                    if let Some(m) = memory {
                        if let Ok(mut c) = m.contractions.lock() {
                            c.insert(shared, value.clone());
                        }
                    }
                    value
                }
            };
            self.cache.insert(key.clone(), value);
        }
        let Some(Some(c)) = self.cache.get(&key) else {
            return Ok(None);
        };
        // The key's names back to the legs' own; summed names apart.
        let mut map: BTreeMap<String, Index> = BTreeMap::new();
        for (k, n) in names.iter().enumerate() {
            map.insert(format!("κs{}", k + 1), Index::Named(n.clone()));
        }
        for (k, n) in c.summed.iter().enumerate() {
            map.insert(n.clone(), Index::Named(format!("κf{position}_{}", k + 1)));
        }
        Ok(Some(rename_indices(&c.term, &map)))
    }
}

/// The index names of a normalised propagator factor other than the free
/// derivative indices of its two fields: the ones summed inside it.
fn summed_names(t: &Term, a: &[Index], b: &[Index]) -> BTreeSet<String> {
    let mut counts: BTreeMap<&str, usize> = BTreeMap::new();
    for i in a.iter().chain(b) {
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
