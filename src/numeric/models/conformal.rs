//! Fixed conformal forms with declared coefficients.
//!
//! Dimensions are the operators' declared `dim` attributes (T and D have
//! dimension d); coefficients are terms, so they may be numbers or symbolic
//! parameters. The forms (docs/conventions.md §1, §2, §4):
//!
//! - ⟨O_1(x_1) O_2(x_2)⟩ = C_12 / |x_12|^{2Δ} for Δ_1 = Δ_2, zero when the
//!   dimensions differ by a nonzero number [common practice];
//! - ⟨O_1 O_2 O_3⟩ = C_123 / (|x_12|^{Δ_1+Δ_2-Δ_3} |x_13|^{Δ_1+Δ_3-Δ_2}
//!   |x_23|^{Δ_2+Δ_3-Δ_1}) [common practice];
//! - ⟨T_{μν}(x_1) O(x_2) O(x_3)⟩ = a h_{μν} / (x_12^d x_13^d x_23^{2Δ-d}),
//!   h_{μν} = X_μX_ν/X² - δ_{μν}/d, X = x_21/x_21² - x_31/x_31², with
//!   a = -dΔC_O/((d-1)S_d) unless a coefficient is declared (Osborn &
//!   Petkou 1994, hep-th/9307010; sign as in docs/conventions.md §3). X² is written
//!   as x_23²/(x_12² x_13²), an identity of the three distances;
//! - ⟨T_{μν}(x) T_{ρσ}(0)⟩ = C_T I_{μν,ρσ}(x)/x^{2d} (Osborn & Petkou 1994);
//! - ⟨V_μ(x_1) W_ν(x_2)⟩ = C_VW I_μν(x_12)/|x_12|^{2Δ} for bulk vectors of
//!   equal dimension (Osborn & Petkou 1994 §2, from memory; common practice);
//! - ⟨V_μ(x_1) A(x_2) B(x_3)⟩ = λ Z_μ |x_12| |x_13| / |x_23|
//!   / (|x_12|^{Δ_V+Δ_A-Δ_B} |x_13|^{Δ_V+Δ_B-Δ_A} |x_23|^{Δ_A+Δ_B-Δ_V}),
//!   Z_μ = x_12μ/x_12² - x_13μ/x_13² (Z/|Z| the unit vector at x_1; common
//!   practice), λ declared for the order (V, A, B) (λ_VBA = -λ_VAB); for a
//!   conserved V of dimension d - 1 next to charged A, B of equal dimension
//!   with ⟨A B⟩ = C_AB, the charge Ward identity
//!   ∂_μ⟨V_μ(x) X⟩ = -Σ q_i δ(x - x_i)⟨X⟩ fixes λ = -q_A C_AB/S_d unless
//!   declared (docs/conventions.md §13, derived);
//! - ⟨T_μν(x_1) J_α(x_2) K_β(x_3)⟩ of conserved currents of dimension
//!   d - 1: the two conserved structures P, Q with coefficients a, b (the
//!   form after Osborn & Petkou 1994, from memory; the structures and
//!   a = b/(d - 2) - d C_JK/S_d derived, docs/conventions.md §13), b
//!   declared as `coefficient <T J K>`;
//! - ⟨O⟩ = ⟨T⟩ = ⟨T O⟩ = ⟨V⟩ = ⟨V O⟩ = ⟨T V⟩ = 0 without a boundary.
//!
//! With a half-space y ≥ 0, in the (2y) or the y convention (a setting,
//! [`Convention`], printed by [`Model::describe`]):
//!
//! - ⟨O(x)⟩ = a_O/(2y)^Δ or a_O/y^Δ;
//! - ⟨O(x) Ô(s)⟩ = b/((2y)^{Δ-Δ̂} |x - s|^{2Δ̂}) or b/(y^{Δ-Δ̂} |x - s|^{2Δ̂})
//!   (|x - s|² = |x∥ - s|² + y² for a boundary point s);
//! - ⟨O(x) D(s)⟩ is the bulk-to-boundary form with Δ̂ = d and, unless
//!   declared, b_OD = -Δ a_O/S_d in the (2y) convention and
//!   -2^d Δ a_O/S_d in the y convention (docs/conventions.md §7, derived);
//! - ⟨Ô_1(s_1) Ô_2(s_2)⟩ = C/|s_12|^{2Δ̂} (⟨D D⟩ with a declared C_D);
//! - ⟨T_{μν}(x) O(x')⟩ = K (ξ(1+ξ))^{-d/2} (V_μV_ν/(ξ(1+ξ)) - δ_{μν}/d)
//!   / ((2y)^d (2y')^Δ), V_μ = (x - x')_μ/(2y') - ξ n_μ,
//!   ξ = (x - x')²/(4yy'), with K = -dΔ a_O^{(2y)}/((d-1)S_d) unless
//!   declared (docs/conventions.md §7, derived); V² = ξ(1+ξ) is used to write X̂X̂;
//! - ⟨T⟩ = ⟨D⟩ = ⟨Ô⟩ = 0.
//!
//! Anything else (a bulk two-point function next to the wall, which
//! depends on an unknown function of the cross-ratio, four points, …) is
//! an error naming the insertions.

use std::collections::BTreeMap;

use super::{
    add, difference, dist_pow, inv, minus, mul, neg, normal_coord, pow, rational, sphere, unknown,
    Model,
};
use crate::context::{Context, DISPLACEMENT, STRESS_TENSOR};
use crate::diagnostic::Result;
use crate::normal::normalize_pointwise as normalize;
use crate::term::{Index, Op, Point, Term};

/// How one-point and bulk-to-boundary functions are normalised next to a
/// wall (docs/conventions.md §1).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Convention {
    /// ⟨O⟩ = a_O/(2y)^Δ (McAvity & Osborn 1995, cond-mat/9505127; Liendo,
    /// Rastelli & van Rees 2012, arXiv:1210.4258).
    #[default]
    TwoY,
    /// ⟨O⟩ = a_O/y^Δ (Billò, Gonçalves, Lauria & Meineri 2016,
    /// arXiv:1601.02883).
    Y,
}

impl Convention {
    /// The convention in words, for reports.
    pub fn describe(self) -> &'static str {
        match self {
            Convention::TwoY => {
                "(2y) convention: ⟨O⟩ = a_O/(2y)^Δ, ⟨O Ô⟩ = b/((2y)^(Δ-Δ̂) |x - s|^(2Δ̂))"
            }
            Convention::Y => "y convention: ⟨O⟩ = a_O/y^Δ, ⟨O Ô⟩ = b/(y^(Δ-Δ̂) |x - s|^(2Δ̂))",
        }
    }
}

/// Conformal forms with declared coefficients. Coefficients between two
/// operators are keyed by the unordered pair of names, three-point ones by
/// the unordered triple.
#[derive(Clone, Debug, Default)]
pub struct Conformal {
    /// Normalisation of one-point and bulk-to-boundary functions.
    pub convention: Convention,
    two_point: BTreeMap<(String, String), Term>,
    three_point: BTreeMap<Vec<String>, Term>,
    stress_coupling: BTreeMap<(String, String), Term>,
    one_point: BTreeMap<String, Term>,
    bulk_boundary: BTreeMap<(String, String), Term>,
    boundary_two_point: BTreeMap<(String, String), Term>,
    stress_one_point: BTreeMap<String, Term>,
    /// λ of ⟨V A B⟩, keyed by (V, A, B) in this order.
    vector_scalar_scalar: BTreeMap<(String, String, String), Term>,
}

fn pair(a: &str, b: &str) -> (String, String) {
    if a <= b {
        (a.to_string(), b.to_string())
    } else {
        (b.to_string(), a.to_string())
    }
}

impl Conformal {
    /// A model with no coefficients declared, in the given convention.
    pub fn new(convention: Convention) -> Conformal {
        Conformal {
            convention,
            ..Conformal::default()
        }
    }

    /// ⟨A B⟩ = c/|x|^{2Δ} for bulk scalars; `two_point("T", "T", C_T)` for
    /// ⟨T T⟩.
    pub fn two_point(mut self, a: &str, b: &str, c: Term) -> Conformal {
        self.two_point.insert(pair(a, b), c);
        self
    }

    /// C_123 of three bulk scalars (in any order).
    pub fn three_point(mut self, names: [&str; 3], c: Term) -> Conformal {
        let mut key: Vec<String> = names.iter().map(|s| s.to_string()).collect();
        key.sort();
        self.three_point.insert(key, c);
        self
    }

    /// The coefficient a of ⟨T A B⟩, in place of the value the Ward
    /// identity fixes (pass a symbol to leave it free).
    pub fn stress_coupling(mut self, a: &str, b: &str, coef: Term) -> Conformal {
        self.stress_coupling.insert(pair(a, b), coef);
        self
    }

    /// a_O of ⟨O⟩ next to the wall, in this model's convention.
    pub fn one_point(mut self, op: &str, a: Term) -> Conformal {
        self.one_point.insert(op.to_string(), a);
        self
    }

    /// b of ⟨O(x) Ô(s)⟩, in this model's convention; with `boundary` = D it
    /// replaces the Ward value of b_OD.
    pub fn bulk_to_boundary(mut self, bulk: &str, boundary: &str, b: Term) -> Conformal {
        self.bulk_boundary
            .insert((bulk.to_string(), boundary.to_string()), b);
        self
    }

    /// C of ⟨Ô_1(s_1) Ô_2(s_2)⟩; `boundary_two_point("D", "D", C_D)`.
    pub fn boundary_two_point(mut self, a: &str, b: &str, c: Term) -> Conformal {
        self.boundary_two_point.insert(pair(a, b), c);
        self
    }

    /// λ of ⟨V_μ(x_1) A(x_2) B(x_3)⟩ for a bulk vector V, in this order
    /// (⟨V B A⟩ has -λ); replaces the charge Ward value.
    pub fn vector_scalar_scalar(mut self, v: &str, a: &str, b: &str, c: Term) -> Conformal {
        self.vector_scalar_scalar
            .insert((v.to_string(), a.to_string(), b.to_string()), c);
        self
    }

    /// K of ⟨T O⟩ next to the wall, in place of the Ward value.
    pub fn stress_one_point(mut self, op: &str, k: Term) -> Conformal {
        self.stress_one_point.insert(op.to_string(), k);
        self
    }
}

/// What an insertion is, for the conformal forms.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Kind {
    Stress,
    BulkScalar,
    /// A bulk operator with one index.
    BulkVector,
    BoundaryScalar,
}

const NAME: &str = "conformal";

impl Model for Conformal {
    fn describe(&self) -> String {
        format!("conformal forms; {}", self.convention.describe())
    }

    fn correlator(&self, ctx: &Context, ops: &[Op]) -> Result<Term> {
        let mut kinds = Vec::with_capacity(ops.len());
        for op in ops {
            kinds.push(kind(ctx, ops, op)?);
        }
        let count = |k: Kind| kinds.iter().filter(|x| **x == k).count();
        let (stress, bulk, boundary, vector) = (
            count(Kind::Stress),
            count(Kind::BulkScalar),
            count(Kind::BoundaryScalar),
            count(Kind::BulkVector),
        );
        let of = |k: Kind| -> Vec<&Op> {
            ops.iter()
                .zip(&kinds)
                .filter(|(_, x)| **x == k)
                .map(|(o, _)| o)
                .collect()
        };
        if ops.is_empty() {
            return Ok(Term::one());
        }
        if ctx.has_halfspace() && vector > 0 {
            return Err(unknown(
                NAME,
                ops,
                "next to a wall the conformal forms know scalars and T",
            ));
        }
        if !ctx.has_halfspace() && vector > 0 {
            return match (stress, bulk, vector) {
                (0, 0, 1) | (0, 1, 1) => Ok(Term::zero()),
                (0, 0, 2) => {
                    let v = of(Kind::BulkVector);
                    self.vector_two_point_fn(ctx, ops, v[0], v[1])
                }
                (0, 2, 1) => {
                    let b = of(Kind::BulkScalar);
                    self.vector_scalar_scalar_fn(ctx, ops, of(Kind::BulkVector)[0], b[0], b[1])
                }
                (1, 0, 1) => Ok(Term::zero()),
                (1, 0, 2) => {
                    let v = of(Kind::BulkVector);
                    self.stress_current_current_fn(ctx, ops, of(Kind::Stress)[0], v[0], v[1])
                }
                _ => Err(unknown(
                    NAME,
                    ops,
                    "the conformal forms with vectors are ⟨V W⟩, ⟨V O O'⟩ and ⟨T J J'⟩",
                )),
            };
        }
        if ctx.has_halfspace() {
            match (stress, bulk, boundary) {
                (0, 1, 0) => self.one_point_fn(ctx, ops, of(Kind::BulkScalar)[0]),
                (1, 0, 0) | (0, 0, 1) => Ok(Term::zero()),
                (0, 1, 1) => self.bulk_boundary_fn(
                    ctx,
                    ops,
                    of(Kind::BulkScalar)[0],
                    of(Kind::BoundaryScalar)[0],
                ),
                (0, 0, 2) => {
                    let b = of(Kind::BoundaryScalar);
                    self.boundary_two_point_fn(ctx, ops, b[0], b[1])
                }
                (1, 1, 0) => {
                    self.stress_one_point_fn(ctx, ops, of(Kind::Stress)[0], of(Kind::BulkScalar)[0])
                }
                // Boundary operators form a CFT in d - 1 dimensions: the
                // scalar three-point function has the same form.
                (0, 0, 3) => {
                    let b = of(Kind::BoundaryScalar);
                    self.three_point_fn(ctx, ops, [b[0], b[1], b[2]])
                }
                (0, 2, 0) => Err(unknown(
                    NAME,
                    ops,
                    "next to a wall a bulk two-point function depends on an unknown \
                     function of the cross-ratio; it is not a fixed form",
                )),
                _ => Err(unknown(
                    NAME,
                    ops,
                    "next to a wall the fixed forms are ⟨O⟩, ⟨O Ô⟩ (Ô may be D), \
                     ⟨Ô Ô⟩, ⟨Ô Ô Ô⟩ and ⟨T O⟩",
                )),
            }
        } else {
            match (stress, bulk) {
                (0, 1) | (1, 0) | (1, 1) => Ok(Term::zero()),
                (0, 2) => {
                    let b = of(Kind::BulkScalar);
                    self.two_point_fn(ctx, ops, b[0], b[1])
                }
                (2, 0) => {
                    let t = of(Kind::Stress);
                    self.stress_two_point_fn(ctx, ops, t[0], t[1])
                }
                (0, 3) => {
                    let b = of(Kind::BulkScalar);
                    self.three_point_fn(ctx, ops, [b[0], b[1], b[2]])
                }
                (1, 2) => {
                    let b = of(Kind::BulkScalar);
                    self.stress_scalar_scalar(ctx, ops, of(Kind::Stress)[0], b[0], b[1])
                }
                _ => Err(unknown(
                    NAME,
                    ops,
                    "without a boundary the fixed forms are two- and three-point \
                     functions of scalars, ⟨T O O⟩ and ⟨T T⟩",
                )),
            }
        }
    }
}

fn kind(ctx: &Context, ops: &[Op], op: &Op) -> Result<Kind> {
    if op.name == STRESS_TENSOR {
        if op.indices.len() != 2 {
            return Err(unknown(NAME, ops, "T carries two indices"));
        }
        return Ok(Kind::Stress);
    }
    let Some(decl) = ctx.operator(&op.name) else {
        return Err(unknown(
            NAME,
            ops,
            format!("the operator {} is not declared", op.name),
        ));
    };
    if decl.rank == 1 && op.indices.len() == 1 && !decl.boundary {
        return Ok(Kind::BulkVector);
    }
    if decl.rank != 0 || !op.indices.is_empty() {
        return Err(unknown(
            NAME,
            ops,
            format!(
                "{} carries indices; the conformal forms know scalars, bulk vectors and T",
                op.name
            ),
        ));
    }
    Ok(if decl.boundary || op.name == DISPLACEMENT {
        Kind::BoundaryScalar
    } else {
        Kind::BulkScalar
    })
}

/// The declared dimension of an operator.
fn dimension(ctx: &Context, ops: &[Op], op: &Op) -> Result<Term> {
    ctx.attribute(&op.name, "dim")
        .cloned()
        .ok_or_else(|| unknown(NAME, ops, format!("{} has no declared dimension", op.name)))
}

/// Some(true) if the dimensions are equal, Some(false) if they differ by a
/// nonzero number, None if that cannot be decided.
fn same_dimension(ctx: &Context, a: &Term, b: &Term) -> Result<Option<bool>> {
    Ok(match normalize(ctx, &minus(a.clone(), b.clone()))? {
        t if t.is_zero() => Some(true),
        Term::Num(_) => Some(false),
        _ => None,
    })
}

impl Conformal {
    /// 2y or y: the length that one-point functions are measured in.
    fn wall_length(&self, p: &Point) -> Term {
        match self.convention {
            Convention::TwoY => mul(vec![Term::int(2), normal_coord(p)]),
            Convention::Y => normal_coord(p),
        }
    }

    fn coefficient<'a>(
        map: &'a BTreeMap<(String, String), Term>,
        ops: &[Op],
        a: &str,
        b: &str,
        what: &str,
    ) -> Result<&'a Term> {
        map.get(&pair(a, b))
            .ok_or_else(|| unknown(NAME, ops, format!("no {what} is declared for {a} and {b}")))
    }

    fn two_point_fn(&self, ctx: &Context, ops: &[Op], a: &Op, b: &Op) -> Result<Term> {
        let (da, db) = (dimension(ctx, ops, a)?, dimension(ctx, ops, b)?);
        match same_dimension(ctx, &da, &db)? {
            Some(false) => return Ok(Term::zero()),
            None if !self.two_point.contains_key(&pair(&a.name, &b.name)) => {
                return Err(unknown(
                    NAME,
                    ops,
                    "the two dimensions may differ; declare a two-point coefficient \
                     only for operators of equal dimension",
                ))
            }
            _ => {}
        }
        let c = Self::coefficient(
            &self.two_point,
            ops,
            &a.name,
            &b.name,
            "two-point coefficient",
        )?;
        Ok(mul(vec![
            c.clone(),
            dist_pow(&a.point, &b.point, neg(mul(vec![Term::int(2), da]))),
        ]))
    }

    fn three_point_fn(&self, ctx: &Context, ops: &[Op], o: [&Op; 3]) -> Result<Term> {
        let mut key: Vec<String> = o.iter().map(|op| op.name.clone()).collect();
        key.sort();
        let c = self.three_point.get(&key).ok_or_else(|| {
            unknown(
                NAME,
                ops,
                format!(
                    "no three-point coefficient is declared for {}",
                    key.join(", ")
                ),
            )
        })?;
        let dims = [
            dimension(ctx, ops, o[0])?,
            dimension(ctx, ops, o[1])?,
            dimension(ctx, ops, o[2])?,
        ];
        let mut factors = vec![c.clone()];
        for (i, j, k) in [(0, 1, 2), (0, 2, 1), (1, 2, 0)] {
            // |x_ij|^{-(Δ_i + Δ_j - Δ_k)}
            let e = neg(add(vec![
                dims[i].clone(),
                dims[j].clone(),
                neg(dims[k].clone()),
            ]));
            factors.push(dist_pow(&o[i].point, &o[j].point, e));
        }
        Ok(mul(factors))
    }

    fn stress_scalar_scalar(
        &self,
        ctx: &Context,
        ops: &[Op],
        t: &Op,
        a: &Op,
        b: &Op,
    ) -> Result<Term> {
        let (da, db) = (dimension(ctx, ops, a)?, dimension(ctx, ops, b)?);
        match same_dimension(ctx, &da, &db)? {
            Some(true) => {}
            Some(false) => return Ok(Term::zero()),
            None => {
                return Err(unknown(
                    NAME,
                    ops,
                    "the two scalar dimensions may differ; ⟨T O O⟩ needs equal ones",
                ))
            }
        }
        let d = ctx.dim();
        let coef = match self.stress_coupling.get(&pair(&a.name, &b.name)) {
            Some(c) => c.clone(),
            None => {
                let c = Self::coefficient(
                    &self.two_point,
                    ops,
                    &a.name,
                    &b.name,
                    "two-point coefficient (it fixes ⟨T O O⟩)",
                )?;
                // a = -d Δ C_O / ((d - 1) S_d)
                mul(vec![
                    Term::int(-1),
                    d.clone(),
                    da.clone(),
                    c.clone(),
                    inv(minus(d.clone(), Term::one())),
                    inv(sphere()),
                ])
            }
        };
        let (x1, x2, x3) = (&t.point, &a.point, &b.point);
        let (i, j) = (&t.indices[0], &t.indices[1]);
        // X_i = (x2 - x1)_i/|x12|² - (x3 - x1)_i/|x13|²
        let x_comp = |k: &Index| {
            minus(
                mul(vec![difference(x2, x1, k), dist_pow(x1, x2, Term::int(-2))]),
                mul(vec![difference(x3, x1, k), dist_pow(x1, x3, Term::int(-2))]),
            )
        };
        // X_i X_j / X² - δ_ij/d, with 1/X² = |x12|² |x13|² / |x23|².
        let h = minus(
            mul(vec![
                x_comp(i),
                x_comp(j),
                dist_pow(x1, x2, Term::int(2)),
                dist_pow(x1, x3, Term::int(2)),
                dist_pow(x2, x3, Term::int(-2)),
            ]),
            mul(vec![Term::Kron(i.clone(), j.clone()), inv(d.clone())]),
        );
        Ok(mul(vec![
            coef,
            h,
            dist_pow(x1, x2, neg(d.clone())),
            dist_pow(x1, x3, neg(d.clone())),
            dist_pow(x2, x3, minus(d, mul(vec![Term::int(2), da]))),
        ]))
    }

    /// C I_μν(x_12)/|x_12|^{2Δ}, I_μν = δ_μν - 2 x_μ x_ν/x².
    fn vector_two_point_fn(&self, ctx: &Context, ops: &[Op], a: &Op, b: &Op) -> Result<Term> {
        let scalar = self.two_point_fn(ctx, ops, a, b)?;
        if scalar.is_zero() {
            return Ok(scalar);
        }
        let (m, n) = (&a.indices[0], &b.indices[0]);
        let inversion = minus(
            Term::Kron(m.clone(), n.clone()),
            mul(vec![
                Term::int(2),
                difference(&a.point, &b.point, m),
                difference(&a.point, &b.point, n),
                dist_pow(&a.point, &b.point, Term::int(-2)),
            ]),
        );
        Ok(mul(vec![inversion, scalar]))
    }

    /// λ_VAB of ⟨V A B⟩ in the order of `a`, `b`: declared (either order,
    /// with the sign of Z), or -q_A C_AB/S_d for a conserved V.
    fn vector_coupling(&self, ctx: &Context, ops: &[Op], v: &Op, a: &Op, b: &Op) -> Result<Term> {
        let key = |x: &Op, y: &Op| (v.name.clone(), x.name.clone(), y.name.clone());
        if let Some(c) = self.vector_scalar_scalar.get(&key(a, b)) {
            return Ok(c.clone());
        }
        if let Some(c) = self.vector_scalar_scalar.get(&key(b, a)) {
            return Ok(neg(c.clone()));
        }
        let charge = ctx.attribute(&a.name, "charge");
        match (ctx.is_conserved(&v.name), charge) {
            (true, Some(q)) => {
                let c = Self::coefficient(
                    &self.two_point,
                    ops,
                    &a.name,
                    &b.name,
                    "two-point coefficient (it fixes ⟨V O O'⟩)",
                )?;
                Ok(mul(vec![Term::int(-1), q.clone(), c.clone(), inv(sphere())]))
            }
            _ => Err(unknown(
                NAME,
                ops,
                format!(
                    "no three-point coefficient is declared for {} {} {}                      (`coefficient <{} {} {}> = …`; for a conserved current the                      charges of the scalars fix it)",
                    v.name, a.name, b.name, v.name, a.name, b.name
                ),
            )),
        }
    }

    fn vector_scalar_scalar_fn(
        &self,
        ctx: &Context,
        ops: &[Op],
        v: &Op,
        a: &Op,
        b: &Op,
    ) -> Result<Term> {
        let lambda = self.vector_coupling(ctx, ops, v, a, b)?;
        let dims = [
            dimension(ctx, ops, v)?,
            dimension(ctx, ops, a)?,
            dimension(ctx, ops, b)?,
        ];
        let (x1, x2, x3) = (&v.point, &a.point, &b.point);
        let mu = &v.indices[0];
        // Z_μ = x_12μ/x_12² - x_13μ/x_13², times |x_12| |x_13|/|x_23|.
        let z = minus(
            mul(vec![
                difference(x1, x2, mu),
                dist_pow(x1, x2, Term::int(-2)),
            ]),
            mul(vec![
                difference(x1, x3, mu),
                dist_pow(x1, x3, Term::int(-2)),
            ]),
        );
        let mut factors = vec![
            lambda,
            z,
            dist_pow(x1, x2, Term::one()),
            dist_pow(x1, x3, Term::one()),
            dist_pow(x2, x3, Term::int(-1)),
        ];
        let points = [x1, x2, x3];
        for (i, j, k) in [(0, 1, 2), (0, 2, 1), (1, 2, 0)] {
            let e = neg(add(vec![
                dims[i].clone(),
                dims[j].clone(),
                neg(dims[k].clone()),
            ]));
            factors.push(dist_pow(points[i], points[j], e));
        }
        Ok(mul(factors))
    }

    /// ⟨T_μν(x1) J_α(x2) K_β(x3)⟩ of conserved currents of dimension d - 1
    /// (docs/conventions.md §13):
    ///
    /// ```text
    /// I_αγ(x21) I_βδ(x31) t_μνγδ(X) / (x12^{2(d-1)} x13^{2(d-1)}),
    /// t = |X|^{2-d} (a P + b Q),
    /// P = h_μν δ_γδ - H_μνγδ,   Q = h_μν X̂_γX̂_δ + H_μνγδ/d + 2 E_μνγδ/(d(d-2)),
    /// ```
    ///
    /// h_μν = X̂_μX̂_ν - δ_μν/d, H the symmetric traceless part in (μ, ν) of
    /// X̂_μ δ_νγ X̂_δ + X̂_μ δ_νδ X̂_γ, E that of δ_μγ δ_νδ; X as in ⟨T O O⟩.
    /// b is declared (`coefficient <T J K> = b`); the Ward identity fixes
    /// a = b/(d - 2) - d C_JK/S_d from ⟨J K⟩ = C_JK I/x^{2(d-1)}.
    fn stress_current_current_fn(
        &self,
        ctx: &Context,
        ops: &[Op],
        t: &Op,
        j: &Op,
        k: &Op,
    ) -> Result<Term> {
        let d = ctx.dim();
        let current = minus(d.clone(), Term::one());
        for v in [j, k] {
            let conserved = ctx.is_conserved(&v.name);
            let dim = dimension(ctx, ops, v)?;
            if !conserved || same_dimension(ctx, &dim, &current)? != Some(true) {
                return Err(unknown(
                    NAME,
                    ops,
                    format!(
                        "⟨T J J'⟩ is a fixed form for conserved currents of dimension d - 1; \
                         declare `vector {} dim d - 1, conserved`",
                        v.name
                    ),
                ));
            }
        }
        let c = Self::coefficient(
            &self.two_point,
            ops,
            &j.name,
            &k.name,
            "two-point coefficient C_J (it fixes one coefficient of ⟨T J J'⟩)",
        )?;
        let b = self
            .stress_coupling
            .get(&pair(&j.name, &k.name))
            .cloned()
            .ok_or_else(|| {
                unknown(
                    NAME,
                    ops,
                    format!(
                        "⟨T {} {}⟩ has two conserved structures and the Ward identity fixes \
                         one combination; declare the other, `coefficient <T {} {}> = b` \
                         (docs/conventions.md §13)",
                        j.name, k.name, j.name, k.name
                    ),
                )
            })?;
        // a = b/(d - 2) - d C/S_d
        let a = minus(
            mul(vec![b.clone(), inv(minus(d.clone(), Term::int(2)))]),
            mul(vec![d.clone(), c.clone(), inv(sphere())]),
        );
        let (x1, x2, x3) = (&t.point, &j.point, &k.point);
        let (m, n) = (&t.indices[0], &t.indices[1]);
        let (al, be) = (&j.indices[0], &k.indices[0]);
        // Written without summed indices: with u = x2 - x1, w = x3 - x1,
        // v = x3 - x2, I(u)X̂ = (|u||v|/|w|) Y2 and I(w)X̂ = (|v||w|/|u|) Y3,
        // Y2 = -u/u² - v/v², Y3 = w/w² - v/v², |X| = |v|/(|u||w|), and
        // u·w = (u² + w² - v²)/2; every odd power of a distance cancels.
        let kron = |p: &Index, q: &Index| Term::Kron(p.clone(), q.clone());
        let sq = |p: &Point, q: &Point| dist_pow(p, q, Term::int(2));
        let over_sq = |p: &Point, q: &Point| dist_pow(p, q, Term::int(-2));
        let u = |i: &Index| difference(x2, x1, i);
        let w = |i: &Index| difference(x3, x1, i);
        let v = |i: &Index| difference(x3, x2, i);
        let x_vec = |i: &Index| {
            minus(
                mul(vec![u(i), over_sq(x1, x2)]),
                mul(vec![w(i), over_sq(x1, x3)]),
            )
        };
        let y2 = |i: &Index| {
            neg(add(vec![
                mul(vec![u(i), over_sq(x1, x2)]),
                mul(vec![v(i), over_sq(x2, x3)]),
            ]))
        };
        let y3 = |i: &Index| {
            minus(
                mul(vec![w(i), over_sq(x1, x3)]),
                mul(vec![v(i), over_sq(x2, x3)]),
            )
        };
        // I_ij(p - x1)
        let inversion = |p: &Point, i: &Index, l: &Index| {
            minus(
                kron(i, l),
                mul(vec![
                    Term::int(2),
                    difference(p, x1, i),
                    difference(p, x1, l),
                    dist_pow(p, x1, Term::int(-2)),
                ]),
            )
        };
        // K_αβ = I_αγ(u) I_γβ(w)
        let k_ab = add(vec![
            kron(al, be),
            mul(vec![Term::int(-2), u(al), u(be), over_sq(x1, x2)]),
            mul(vec![Term::int(-2), w(al), w(be), over_sq(x1, x3)]),
            mul(vec![
                Term::int(2),
                add(vec![sq(x1, x2), sq(x1, x3), neg(sq(x2, x3))]),
                u(al),
                w(be),
                over_sq(x1, x2),
                over_sq(x1, x3),
            ]),
        ]);
        let inv_d = inv(d.clone());
        let half = || rational(1, 2);
        // h_μν = X̂_μX̂_ν - δ_μν/d, X̂_μX̂_ν = X_μX_ν u²w²/v²
        let hmn = minus(
            mul(vec![
                x_vec(m),
                x_vec(n),
                sq(x1, x2),
                sq(x1, x3),
                over_sq(x2, x3),
            ]),
            mul(vec![kron(m, n), inv_d.clone()]),
        );
        // (I(u)X̂)_α (I(w)X̂)_β = v² Y2_α Y3_β
        let a2a3 = mul(vec![sq(x2, x3), y2(al), y3(be)]);
        // H = S3 + S4 contracted: X̂_μ δ_νγ X̂_δ → w² X_μ I_αν(u) Y3_β,
        // X̂_μ δ_νδ X̂_γ → u² X_μ I_βν(w) Y2_α, symmetric traceless in (μ, ν).
        let big_h = add(vec![
            mul(vec![
                half(),
                sq(x1, x3),
                x_vec(m),
                inversion(x2, al, n),
                y3(be),
            ]),
            mul(vec![
                half(),
                sq(x1, x3),
                x_vec(n),
                inversion(x2, al, m),
                y3(be),
            ]),
            mul(vec![
                half(),
                sq(x1, x2),
                x_vec(m),
                inversion(x3, be, n),
                y2(al),
            ]),
            mul(vec![
                half(),
                sq(x1, x2),
                x_vec(n),
                inversion(x3, be, m),
                y2(al),
            ]),
            neg(mul(vec![
                Term::int(2),
                inv_d.clone(),
                kron(m, n),
                a2a3.clone(),
            ])),
        ]);
        // E contracted: ½ (I_αμ(u) I_βν(w) + I_αν(u) I_βμ(w)) - δ_μν K_αβ/d
        let big_e = add(vec![
            mul(vec![half(), inversion(x2, al, m), inversion(x3, be, n)]),
            mul(vec![half(), inversion(x2, al, n), inversion(x3, be, m)]),
            neg(mul(vec![inv_d.clone(), kron(m, n), k_ab.clone()])),
        ]);
        let p_structure = minus(mul(vec![hmn.clone(), k_ab]), big_h.clone());
        let q_structure = add(vec![
            mul(vec![hmn, a2a3]),
            mul(vec![inv_d.clone(), big_h]),
            mul(vec![
                Term::int(2),
                inv_d,
                inv(minus(d.clone(), Term::int(2))),
                big_e,
            ]),
        ]);
        // |X|^{2-d}/(x12^{2(d-1)} x13^{2(d-1)}) = x12^{-d} x13^{-d} x23^{2-d}
        Ok(mul(vec![
            add(vec![mul(vec![a, p_structure]), mul(vec![b, q_structure])]),
            dist_pow(x1, x2, neg(d.clone())),
            dist_pow(x1, x3, neg(d.clone())),
            dist_pow(x2, x3, minus(Term::int(2), d)),
        ]))
    }

    fn stress_two_point_fn(&self, ctx: &Context, ops: &[Op], t1: &Op, t2: &Op) -> Result<Term> {
        let c = Self::coefficient(&self.two_point, ops, STRESS_TENSOR, STRESS_TENSOR, "C_T")?;
        let d = ctx.dim();
        let (x, z) = (&t1.point, &t2.point);
        // I_ab(x) = δ_ab - 2 x_a x_b / x²
        let inversion = |p: &Index, q: &Index| {
            minus(
                Term::Kron(p.clone(), q.clone()),
                mul(vec![
                    Term::int(2),
                    difference(x, z, p),
                    difference(x, z, q),
                    dist_pow(x, z, Term::int(-2)),
                ]),
            )
        };
        let (m, n) = (&t1.indices[0], &t1.indices[1]);
        let (r, s) = (&t2.indices[0], &t2.indices[1]);
        let structure = add(vec![
            mul(vec![rational(1, 2), inversion(m, r), inversion(n, s)]),
            mul(vec![rational(1, 2), inversion(m, s), inversion(n, r)]),
            neg(mul(vec![
                Term::Kron(m.clone(), n.clone()),
                Term::Kron(r.clone(), s.clone()),
                inv(d.clone()),
            ])),
        ]);
        Ok(mul(vec![
            c.clone(),
            structure,
            dist_pow(x, z, mul(vec![Term::int(-2), d])),
        ]))
    }

    fn one_point_coefficient(&self, ops: &[Op], op: &Op) -> Result<Term> {
        self.one_point.get(&op.name).cloned().ok_or_else(|| {
            unknown(
                NAME,
                ops,
                format!("no one-point coefficient a_{} is declared", op.name),
            )
        })
    }

    fn one_point_fn(&self, ctx: &Context, ops: &[Op], op: &Op) -> Result<Term> {
        let a = self.one_point_coefficient(ops, op)?;
        let delta = dimension(ctx, ops, op)?;
        Ok(mul(vec![a, pow(self.wall_length(&op.point), neg(delta))]))
    }

    fn bulk_boundary_fn(&self, ctx: &Context, ops: &[Op], o: &Op, hat: &Op) -> Result<Term> {
        let delta = dimension(ctx, ops, o)?;
        let delta_hat = dimension(ctx, ops, hat)?;
        let key = (o.name.clone(), hat.name.clone());
        let b = match self.bulk_boundary.get(&key) {
            Some(b) => b.clone(),
            None if hat.name == DISPLACEMENT => {
                // W5 with the normal translation (docs/conventions.md §7, derived).
                let a = self.one_point_coefficient(ops, o).map_err(|_| {
                    unknown(
                        NAME,
                        ops,
                        format!(
                            "b_{}D follows from a_{} by the broken Ward identity; \
                             declare one of them",
                            o.name, o.name
                        ),
                    )
                })?;
                let scale = match self.convention {
                    Convention::TwoY => Term::one(),
                    Convention::Y => pow(Term::int(2), ctx.dim()),
                };
                mul(vec![Term::int(-1), scale, delta.clone(), a, inv(sphere())])
            }
            None => {
                return Err(unknown(
                    NAME,
                    ops,
                    format!(
                        "no bulk-to-boundary coefficient is declared for {} and {}",
                        o.name, hat.name
                    ),
                ))
            }
        };
        Ok(mul(vec![
            b,
            pow(self.wall_length(&o.point), minus(delta_hat.clone(), delta)),
            dist_pow(&o.point, &hat.point, mul(vec![Term::int(-2), delta_hat])),
        ]))
    }

    fn boundary_two_point_fn(&self, ctx: &Context, ops: &[Op], a: &Op, b: &Op) -> Result<Term> {
        let (da, db) = (dimension(ctx, ops, a)?, dimension(ctx, ops, b)?);
        match same_dimension(ctx, &da, &db)? {
            Some(false) => return Ok(Term::zero()),
            None if !self
                .boundary_two_point
                .contains_key(&pair(&a.name, &b.name)) =>
            {
                return Err(unknown(
                    NAME,
                    ops,
                    "the two boundary dimensions may differ; declare a coefficient \
                     only for operators of equal dimension",
                ))
            }
            _ => {}
        }
        let c = Self::coefficient(
            &self.boundary_two_point,
            ops,
            &a.name,
            &b.name,
            "boundary two-point coefficient",
        )?;
        Ok(mul(vec![
            c.clone(),
            dist_pow(&a.point, &b.point, neg(mul(vec![Term::int(2), da]))),
        ]))
    }

    fn stress_one_point_fn(&self, ctx: &Context, ops: &[Op], t: &Op, o: &Op) -> Result<Term> {
        let d = ctx.dim();
        let delta = dimension(ctx, ops, o)?;
        let k = match self.stress_one_point.get(&o.name) {
            Some(k) => k.clone(),
            None => {
                let a = self.one_point_coefficient(ops, o).map_err(|_| {
                    unknown(
                        NAME,
                        ops,
                        format!(
                            "K of ⟨T {}⟩ follows from a_{} by the Ward identity; \
                             declare one of them",
                            o.name, o.name
                        ),
                    )
                })?;
                // a in the (2y) convention.
                let a2y = match self.convention {
                    Convention::TwoY => a,
                    Convention::Y => mul(vec![pow(Term::int(2), delta.clone()), a]),
                };
                // K = -d Δ a / ((d - 1) S_d)
                mul(vec![
                    Term::int(-1),
                    d.clone(),
                    delta.clone(),
                    a2y,
                    inv(minus(d.clone(), Term::one())),
                    inv(sphere()),
                ])
            }
        };
        let (x, xp) = (&t.point, &o.point);
        let (y, yp) = (normal_coord(x), normal_coord(xp));
        let (i, j) = (&t.indices[0], &t.indices[1]);
        let four_yy = mul(vec![Term::int(4), y.clone(), yp.clone()]);
        let rho2 = dist_pow(x, xp, Term::int(2));
        // ξ = ρ²/(4yy'), 1 + ξ = ρ̄²/(4yy') with ρ̄² = ρ² + 4yy' = |x - x̄'|².
        let rhobar2 = add(vec![rho2.clone(), four_yy.clone()]);
        let xi = mul(vec![rho2.clone(), inv(four_yy.clone())]);
        // V_i = (x - x')_i/(2y') - ξ n_i
        let v = |k: &Index| {
            minus(
                mul(vec![
                    difference(x, xp, k),
                    inv(mul(vec![Term::int(2), yp.clone()])),
                ]),
                mul(vec![xi.clone(), Term::Normal(k.clone())]),
            )
        };
        // 1/(ξ(1+ξ)) = (4yy')²/(ρ² ρ̄²)
        let inv_v2 = mul(vec![
            pow(four_yy.clone(), Term::int(2)),
            dist_pow(x, xp, Term::int(-2)),
            inv(rhobar2.clone()),
        ]);
        let structure = minus(
            mul(vec![v(i), v(j), inv_v2]),
            mul(vec![Term::Kron(i.clone(), j.clone()), inv(d.clone())]),
        );
        // (ξ(1+ξ))^{-d/2} = (4yy')^d |x - x'|^{-d} (ρ̄²)^{-d/2}
        let prefactor = mul(vec![
            pow(four_yy, d.clone()),
            dist_pow(x, xp, neg(d.clone())),
            pow(rhobar2, mul(vec![rational(-1, 2), d.clone()])),
        ]);
        Ok(mul(vec![
            k,
            prefactor,
            structure,
            pow(mul(vec![Term::int(2), y]), neg(d)),
            pow(mul(vec![Term::int(2), yp]), neg(delta)),
        ]))
    }
}
