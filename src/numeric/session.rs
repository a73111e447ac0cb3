//! Numeric work for one file: the model built from its `model` and
//! `coefficient` statements, numeric values from `values` and `place … at`,
//! and the evaluation of terms.
//!
//! A term is evaluated the symbolic way first: Ward rules and normalisation,
//! then the model's explicit correlators, normalisation again (derivatives
//! of the model are symbolic), then a compiled program. An integral over a
//! sphere `∮[x on ball(c, r)]` or over the boundary plane `∫[x∥ in
//! boundary]` is not worked out symbolically here but by quadrature, with
//! the error estimate reported: that is what makes a flux an independent
//! check of the local identities (docs/conventions.md §8).

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};

use num_traits::{One, ToPrimitive, Zero};

use super::agreement::{
    agreement, describe_loss, relative_difference, Agreement, ERROR_SAFETY, RESOLUTION,
};
use super::eval::compile;
use super::models::conformal::{Conformal, Convention};
use super::models::free_scalar::{Composite, FreeScalar, Mapping, Reflection, Wall};
use super::models::{apply, pointwise_pairs, sphere_area, Model, SPHERE_AREA};
use super::quadrature::{integrate_batch, Surface, Tolerance, MAX_DIM, MIN_DIM};
use super::series::{Series, Q};
use super::Values;
use crate::context::{Context, IndexKind, DIMENSION, STRESS_TENSOR};
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::engine::{Engine, Solved, Verdict};
use crate::lower::{Family, ModelChoice, NumericSpec};
use crate::normal::{normalize_pointwise as normalize, Coincidence, Singular};
use crate::term::{Index, Integral, Point, Region, Term};

/// The parameter that carries the outward normal at each quadrature node.
const NORMAL_VALUE: &str = "N#";
/// Relative accuracy asked of quadrature unless a `tolerance` statement
/// sets it.
pub const QUADRATURE_TOLERANCE: f64 = 1e-11;
/// Absolute accuracy asked of quadrature, for integrals that vanish, as a
/// fraction of the relative one (1e-12 by default).
const QUADRATURE_FLOOR: f64 = 0.1;
/// Largest number of integrand evaluations for one integral.
const QUADRATURE_BUDGET: usize = 400_000;
/// How far (relative) a third evaluation of `solve` may be off the line
/// through the first two.
const LINEARITY_TOLERANCE: f64 = 1e-8;
/// Every this many integrand evaluations, one carries a rounding bound.
const ROUNDING_SAMPLE: usize = 16;

/// The numeric set-up of one file. It may be shared between threads (a
/// scan's steps run in parallel), and [`Session::on_sample`] gives each
/// thread of a `sample` its own configuration with the same model and the
/// same cache of symbolic work.
pub struct Session<'a> {
    ctx: &'a Context,
    engine: &'a Engine,
    model: Arc<dyn Model + Send + Sync>,
    /// One set of values per sample (declared positions, plus seeded random
    /// ones for points without a position); statements run on each.
    samples: Arc<Vec<Values>>,
    current: AtomicUsize,
    /// Explicit normal forms already worked out, by input term.
    explicit_cache: Arc<Mutex<std::collections::HashMap<Term, Term>>>,
    /// Their compiled forms, by input term and component: a scan or a grid
    /// evaluates the same component at many configurations.
    compiled_cache: Arc<Mutex<CompiledCache>>,
    /// Second-order double integrals of `perturb` already done, by the
    /// connected correlator, the values and the tolerance: they do not
    /// depend on the coupling, so several couplings share one.
    double_cache: Arc<Mutex<std::collections::HashMap<String, super::perturb::DoubleResult>>>,
    /// The relative accuracy asked of quadrature (`tolerance`, or
    /// [`QUADRATURE_TOLERANCE`]).
    tolerance: f64,
    /// The scalar parameters' values as given (exact rationals), for the
    /// series solve of `decompose`.
    exact: Arc<std::collections::BTreeMap<String, Q>>,
}

type CompiledCache =
    std::collections::HashMap<(Term, Vec<(String, usize)>), Arc<super::eval::Program>>;

pub use super::agreement::Value;

/// The solution of a linear equation for one parameter.
#[derive(Clone, Debug, PartialEq)]
pub struct Solution {
    pub value: f64,
    /// The component of the equation that fixed it.
    pub component: Vec<(String, usize)>,
    /// Largest |left - right| over all components at the solution.
    pub residual: f64,
}

/// A scan: for each value of the parameter, every component of both sides.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Scan {
    pub param: String,
    /// One label per component (`nu=0`, or empty for a scalar).
    pub labels: Vec<String>,
    /// (parameter, left components, right components).
    pub rows: Vec<(f64, Vec<f64>, Vec<f64>)>,
    /// Per row, per component: the relative difference of the two sides
    /// and the agreement rule's verdict.
    pub judged: Vec<Vec<(f64, Agreement)>>,
    /// Per row: the error estimate of each component of the left and the
    /// right side (quadrature error plus rounding bound; empty when not
    /// kept).
    pub errors: Vec<(Vec<f64>, Vec<f64>)>,
}

/// A local identity checked insertion by insertion.
#[derive(Clone, Debug, PartialEq)]
pub struct FluxReport {
    pub around: Vec<FluxCheck>,
    pub away: Vec<Conservation>,
}

/// The flux through the sphere around one insertion and the contact terms
/// the right side puts inside it.
#[derive(Clone, Debug, PartialEq)]
pub struct FluxCheck {
    pub point: String,
    pub flux: Evaluation,
    pub contact: Evaluation,
}

/// The divergence of the model's current at a point away from insertions,
/// with the size of the current there (over the radius) for scale.
#[derive(Clone, Debug, PartialEq)]
pub struct Conservation {
    pub at: Vec<f64>,
    /// The component of the divergence largest in size, with the largest
    /// rounding bound of any component.
    pub largest: Value,
    pub scale: f64,
}

/// One configuration of [`Session::evaluate_rows`]: scalar parameters and
/// point positions (d coordinates each, the normal one last) that replace
/// the file's.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Row {
    pub scalars: Vec<(String, f64)>,
    pub points: Vec<(String, Vec<f64>)>,
}

/// The values of a term, one per assignment of its free indices.
#[derive(Clone, Debug, PartialEq)]
pub struct Evaluation {
    pub components: Vec<(Vec<(String, usize)>, Value)>,
}

impl Evaluation {
    /// One label per component, `mu=0 nu=1` (empty for a scalar).
    pub fn labels(&self) -> Vec<String> {
        self.components
            .iter()
            .map(|(a, _)| {
                a.iter()
                    .map(|(n, v)| format!("{n}={v}"))
                    .collect::<Vec<_>>()
                    .join(" ")
            })
            .collect()
    }
}

impl<'a> Session<'a> {
    pub fn new(ctx: &'a Context, engine: &'a Engine, spec: &NumericSpec) -> Result<Session<'a>> {
        let Some((choice, _)) = &spec.model else {
            return Err(Error::new(
                ErrorKind::Numeric,
                "numeric work needs a model: `model conformal` or `model free-scalar …`",
            ));
        };
        let model = build_model(ctx, choice, spec)?;
        let base = values(ctx, spec)?;
        let samples = match spec.sample {
            Some((count, seed)) => random_samples(ctx, &base, count, seed)?,
            None => vec![base],
        };
        Ok(Session {
            ctx,
            engine,
            model: Arc::from(model),
            samples: Arc::new(samples),
            current: AtomicUsize::new(0),
            explicit_cache: Arc::new(Mutex::new(std::collections::HashMap::new())),
            compiled_cache: Arc::new(Mutex::new(std::collections::HashMap::new())),
            double_cache: Arc::new(Mutex::new(std::collections::HashMap::new())),
            tolerance: spec.tolerance.unwrap_or(QUADRATURE_TOLERANCE),
            exact: Arc::new(
                spec.values
                    .iter()
                    .filter(|(n, v)| v.len() == 1 && !ctx.params.contains_key(*n))
                    .map(|(n, v)| (n.clone(), v[0].clone()))
                    .collect(),
            ),
        })
    }

    /// The same session on sample `k`, sharing the model and the symbolic
    /// work done so far (for running configurations on several threads).
    pub fn on_sample(&self, k: usize) -> Session<'a> {
        let view = Session {
            ctx: self.ctx,
            engine: self.engine,
            model: Arc::clone(&self.model),
            samples: Arc::clone(&self.samples),
            current: AtomicUsize::new(0),
            explicit_cache: Arc::clone(&self.explicit_cache),
            compiled_cache: Arc::clone(&self.compiled_cache),
            double_cache: Arc::clone(&self.double_cache),
            tolerance: self.tolerance,
            exact: Arc::clone(&self.exact),
        };
        view.select(k);
        view
    }

    /// How many sets of values statements run on.
    pub fn sample_count(&self) -> usize {
        self.samples.len()
    }

    /// Makes sample `k` the current one; returns its point positions.
    pub fn select(&self, k: usize) -> Vec<(String, Vec<f64>)> {
        self.current.store(
            k.min(self.samples.len().saturating_sub(1)),
            Ordering::Relaxed,
        );
        self.values()
            .points
            .iter()
            .map(|(n, p)| (n.clone(), p.clone()))
            .collect()
    }

    fn values(&self) -> &Values {
        &self.samples[self.current.load(Ordering::Relaxed)]
    }

    /// One line saying which model is in force.
    pub fn describe(&self) -> String {
        self.model.describe()
    }

    /// Checks `before = after` symbolically with the model's correlators in
    /// place of the correlators: a proof in the model, exact, for every
    /// value of the parameters. Where the model's correlators were built
    /// with pointwise derivatives, the result holds away from coincident
    /// insertions, and says so.
    pub fn prove_in_model(&self, before: &Term, after: &Term) -> Result<Verdict> {
        let b = apply(self.model.as_ref(), self.ctx, before)?;
        let a = apply(self.model.as_ref(), self.ctx, after)?;
        let verdict = self.engine.check(&b, &a)?;
        let mut pairs = pointwise_pairs(self.model.as_ref(), before);
        pairs.extend(pointwise_pairs(self.model.as_ref(), after));
        if pairs.is_empty() {
            return Ok(verdict);
        }
        let away = pairs.into_iter().map(|(p, q)| Coincidence {
            var: p,
            at: Singular::Point(q),
        });
        Ok(match verdict {
            Verdict::Proved(mut s) | Verdict::ProvedAway(mut s) => {
                s.caveats.extend(away);
                Verdict::ProvedAway(s)
            }
            other => other,
        })
    }

    /// Solves `lhs = rhs` for `unknown` exactly, with the model's
    /// correlators in place: `None` when the algebra does not settle it.
    pub fn solve_exact(&self, unknown: &str, lhs: &Term, rhs: &Term) -> Result<Option<Solved>> {
        let l = apply(self.model.as_ref(), self.ctx, lhs)?;
        let r = apply(self.model.as_ref(), self.ctx, rhs)?;
        self.engine.solve_linear(unknown, &l, &r)
    }

    /// The expansion of the two-point function `corr` (two bulk scalars of
    /// equal dimension) in the blocks of `channel` with exchanged dimensions
    /// `dims` ([`super::decompose`]). The points are placed at height 1,
    /// a distance 2√ξ apart along the wall, so that ξ takes the fit values.
    pub fn decompose(
        &self,
        corr: &Term,
        channel: crate::lower::Channel,
        dims: &crate::lower::Dims,
    ) -> Result<super::decompose::Decomposition> {
        use crate::lower::Dims;
        if let Dims::TwistSpin {
            twist,
            spin,
            externals,
        } = dims
        {
            let (d12, d34) = match externals {
                Some(e) => (Some(&e.0), Some(&e.1)),
                None => (None, None),
            };
            return self.decompose_four_point(corr, twist, spin, d12, d34);
        }
        let Term::Corr(ops) = corr else {
            return Err(Error::new(
                ErrorKind::Numeric,
                "a block expansion takes a correlator",
            ));
        };
        let values = self.values().clone();
        let number = |t: &Term| -> Result<f64> { Ok(self.value(t, &[], &values)?.value) };
        let dim_of = |op: &crate::term::Op| -> Result<f64> {
            let dim = self
                .ctx
                .operator(&op.name)
                .and_then(|o| o.attrs.get("dim"))
                .ok_or_else(|| {
                    Error::new(
                        ErrorKind::Numeric,
                        format!("`{}` has no declared dimension", op.name),
                    )
                    .with_note(format!("declare it: `scalar {} dim …`", op.name))
                })?;
            number(dim)
        };
        // ⟨O(x) Ô1(s1) Ô2(s2)⟩ in the boundary channel (docs/conventions.md §15).
        let three = ops.len() == 3;
        let bulk_first: Vec<&crate::term::Op> = if three {
            let mut v: Vec<&crate::term::Op> = ops
                .iter()
                .filter(|o| !self.ctx.is_boundary_point(&o.point))
                .collect();
            v.extend(ops.iter().filter(|o| self.ctx.is_boundary_point(&o.point)));
            v
        } else {
            ops.iter().collect()
        };
        let (d1, d2) = (dim_of(bulk_first[0])?, dim_of(bulk_first[1])?);
        if !three && (d1 - d2).abs() > 1e-12 * d1.abs().max(1.0) {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!(
                    "the two operators have different dimensions ({d1} and {d2}); the blocks here are those of two operators of one dimension"
                ),
            ));
        }
        let (list, tower) = match dims {
            Dims::TwistSpin { .. } => unreachable_dims()?,
            Dims::List(ts) => (ts.iter().map(number).collect::<Result<Vec<f64>>>()?, false),
            Dims::Tower { from, to, step } => {
                let (a, b) = (number(from)?, number(to)?);
                let s = match step {
                    Some(s) => number(s)?,
                    None => 1.0,
                };
                let count = ((b - a) / s + 1e-9).floor();
                if s.is_nan() || s <= 0.0 || !count.is_finite() || count < 0.0 {
                    return Err(Error::new(
                        ErrorKind::Numeric,
                        format!("the tower from {a} to {b} in steps of {s} is empty"),
                    )
                    .with_note("write `blocks FIRST to LAST step S` with LAST ≥ FIRST and S > 0"));
                }
                if count as usize >= super::decompose::MAX_BLOCKS {
                    return Err(Error::new(
                        ErrorKind::Numeric,
                        format!(
                            "the tower has {} dimensions; at most {} are fitted",
                            count as usize + 1,
                            super::decompose::MAX_BLOCKS
                        ),
                    ));
                }
                (
                    (0..=count as usize).map(|k| a + s * k as f64).collect(),
                    true,
                )
            }
        };
        let dim = values.dim;
        if three {
            let d3 = dim_of(bulk_first[2])?;
            let delta12 = d2 - d3;
            // s1, s2 = ∓e_0 on the wall, x = (0, …, 0, y) above their midpoint:
            // χ = 4y²/(1 + y²)², so y² = (2 - χ - 2√(1 - χ))/χ (the root below 1),
            // and F = ⟨O Ô1 Ô2⟩ (2y)^Δ 2^(Δ̂1 + Δ̂2) (|x - s1| = |x - s2|).
            let g = |chi: f64| -> Result<f64> {
                let mut v = values.clone();
                // y = √χ/(1 + √(1 - χ)): the same root without cancellation.
                let y = chi.sqrt() / (1.0 + (1.0 - chi).sqrt());
                let mut p = vec![0.0; dim];
                p[dim - 1] = y;
                let mut q1 = vec![0.0; dim];
                q1[0] = -1.0;
                let mut q2 = vec![0.0; dim];
                q2[0] = 1.0;
                v.points.insert(bulk_first[0].point.name.to_string(), p);
                v.points.insert(bulk_first[1].point.name.to_string(), q1);
                v.points.insert(bulk_first[2].point.name.to_string(), q2);
                let c = self.value(corr, &[], &v)?.value;
                Ok(c * (2.0 * y).powf(d1) * 2f64.powf(d2 + d3))
            };
            return super::decompose::fit(
                channel,
                dim as f64,
                d1,
                Some(delta12),
                &list,
                tower,
                &g,
                None,
            );
        }
        let g = |xi: f64| -> Result<f64> {
            let mut v = values.clone();
            let mut p1 = vec![0.0; dim];
            p1[dim - 1] = 1.0;
            let mut p2 = p1.clone();
            p2[0] = 2.0 * xi.sqrt();
            v.points.insert(ops[0].point.name.to_string(), p1);
            v.points.insert(ops[1].point.name.to_string(), p2);
            let c = self.value(corr, &[], &v)?.value;
            Ok(c * (4.0 * xi).powf(d1))
        };
        // The series solve: G at heights 1/2 (4 y1 y2 = 1), |x1 - x2| = √ξ,
        // in w = 1/ξ (boundary channel) or ξ (bulk channel).
        let exact_dims: Option<Vec<Q>> = match dims {
            Dims::List(ts) => ts.iter().map(|t| self.exact_number(t)).collect(),
            Dims::Tower { from, step, .. } => {
                let a = self.exact_number(from);
                let s = match step {
                    Some(s) => self.exact_number(s),
                    None => Some(Q::one()),
                };
                a.zip(s).map(|(a, s)| {
                    (0..list.len())
                        .map(|k| &a + &s * Q::from_integer(k.into()))
                        .collect()
                })
            }
            Dims::TwistSpin { .. } => None,
        };
        let delta_exact = self
            .ctx
            .operator(&ops[0].name)
            .and_then(|o| o.attrs.get("dim"))
            .and_then(|t| self.exact_number(t));
        let boundary = channel == crate::lower::Channel::Boundary;
        let half = Q::new(1.into(), 2.into());
        let (p1, p2) = (&ops[0].point, &ops[1].point);
        let explicit = self.explicit_term(corr).ok();
        let series_g = |cap: &Q| -> Option<Series> {
            let e = explicit.as_ref()?;
            let delta = delta_exact.as_ref()?;
            let sign = if boundary { -Q::one() } else { Q::one() };
            let leaf = |t: &Term| -> Option<Series> {
                match t {
                    Term::Dist(a, b) if (a == p1 && b == p2) || (a == p2 && b == p1) => {
                        Some(Series::monomial(vec![&sign * &half], Q::one(), cap))
                    }
                    Term::Comp(p, Index::N) if p == p1 || p == p2 => {
                        Some(Series::constant(half.clone(), 1, cap))
                    }
                    _ => self.exact_leaf(t, 1, cap),
                }
            };
            let corr = super::series::of_term(e, 1, cap, &leaf)?;
            corr.mul(&Series::monomial(vec![&sign * delta], Q::one(), cap), cap)
        };
        let exact = match (exact_dims, &delta_exact) {
            (Some(dims), Some(delta)) => Some(super::decompose::TwoPointSeries {
                d: Q::from_integer(dim.into()),
                delta: delta.clone(),
                dims,
                g: &series_g,
            }),
            _ => None,
        };
        super::decompose::fit(
            channel,
            dim as f64,
            d1,
            None,
            &list,
            tower,
            &g,
            exact.as_ref(),
        )
    }

    /// The expansion of a four-point function `f` of z, z̄ (parameters `z`,
    /// `zb`) in the identity and the s-channel blocks of every twist τ and
    /// even or odd spin ℓ of two towers, Δ = τ + ℓ
    /// ([`super::decompose::fit_four_point`]).
    fn decompose_four_point(
        &self,
        f: &Term,
        twist: &(Term, Term, Option<Term>),
        spin: &(Term, Term, Option<Term>),
        delta12: Option<&Term>,
        delta34: Option<&Term>,
    ) -> Result<super::decompose::Decomposition> {
        let values = self.values().clone();
        let number = |t: &Term| -> Result<f64> { Ok(self.value(t, &[], &values)?.value) };
        let external = |t: Option<&Term>| -> Result<(f64, Option<Q>)> {
            match t {
                None => Ok((0.0, Some(Q::zero()))),
                Some(t) => Ok((number(t)?, self.exact_number(t))),
            }
        };
        let (e12, x12) = external(delta12)?;
        let (e34, x34) = external(delta34)?;
        let externals = (e12, e34);
        let ext = (x12, x34);
        let numeric = |m: String| Error::new(ErrorKind::Numeric, m);
        let tower = |t: &(Term, Term, Option<Term>), what: &str| -> Result<Vec<f64>> {
            let (a, b) = (number(&t.0)?, number(&t.1)?);
            let s = match &t.2 {
                Some(s) => number(s)?,
                None => 1.0,
            };
            let count = ((b - a) / s + 1e-9).floor();
            if s.is_nan() || s <= 0.0 || !count.is_finite() || count < 0.0 {
                return Err(numeric(format!(
                    "the {what} from {a} to {b} in steps of {s} are none"
                ))
                .with_note("write `FIRST to LAST step S` with LAST ≥ FIRST and S > 0"));
            }
            if count as usize >= super::decompose::MAX_BLOCKS {
                return Err(numeric(format!(
                    "{} {what}; at most {} blocks are fitted",
                    count as usize + 1,
                    super::decompose::MAX_BLOCKS
                )));
            }
            Ok((0..=count as usize).map(|k| a + s * k as f64).collect())
        };
        let twists = tower(twist, "twists")?;
        let spins = tower(spin, "spins")?;
        let mut blocks = Vec::new();
        for l in &spins {
            if !(l.fract() == 0.0 && *l >= 0.0 && *l <= 1000.0) {
                return Err(numeric(format!("the spin {l} is not a whole number ≥ 0")));
            }
        }
        for t in &twists {
            for l in &spins {
                blocks.push((t + l, *l as u32));
            }
        }
        if blocks.len() > super::decompose::MAX_BLOCKS {
            return Err(numeric(format!(
                "{} twists × {} spins are {} blocks; at most {} are fitted",
                twists.len(),
                spins.len(),
                blocks.len(),
                super::decompose::MAX_BLOCKS
            )));
        }
        let d = values.dim as u32;
        // In u and v alone: Euclidean configurations z̄ = z*; with z or zb
        // in it, real z, z̄.
        let frame = if mentions_symbol(f, "z") || mentions_symbol(f, "zb") {
            super::decompose::Frame::Real
        } else {
            super::decompose::Frame::Euclidean
        };
        let g = |p: f64, q: f64| -> Result<f64> {
            let mut v = values.clone();
            let (u, w) = match frame {
                super::decompose::Frame::Real => {
                    v.scalars.insert("z".into(), p);
                    v.scalars.insert("zb".into(), q);
                    (p * q, (1.0 - p) * (1.0 - q))
                }
                super::decompose::Frame::Euclidean => (p * p, 1.0 - 2.0 * p * q.cos() + p * p),
            };
            v.scalars.insert("u".into(), u);
            v.scalars.insert("v".into(), w);
            Ok(self.value(f, &[], &v)?.value)
        };
        // The series solve: G in z, z̄ (u = z z̄, v = (1 - z)(1 - z̄)).
        let exact_tower = |t: &(Term, Term, Option<Term>), count: usize| -> Option<Vec<Q>> {
            let a = self.exact_number(&t.0)?;
            let s = match &t.2 {
                Some(s) => self.exact_number(s)?,
                None => Q::one(),
            };
            Some(
                (0..count)
                    .map(|k| &a + &s * Q::from_integer(k.into()))
                    .collect(),
            )
        };
        let series_g = |cap: &Q| -> Option<Series> {
            let var = |k: usize| {
                let mut e = vec![Q::zero(), Q::zero()];
                e[k] = Q::one();
                Series::monomial(e, Q::one(), cap)
            };
            let one = Series::constant(Q::one(), 2, cap);
            let leaf = |t: &Term| -> Option<Series> {
                match t {
                    Term::Sym(s) if s == "z" => Some(var(0)),
                    Term::Sym(s) if s == "zb" => Some(var(1)),
                    Term::Sym(s) if s == "u" => var(0).mul(&var(1), cap),
                    Term::Sym(s) if s == "v" => one
                        .add(&var(0).scale(&-Q::one()))
                        .mul(&one.add(&var(1).scale(&-Q::one())), cap),
                    _ => self.exact_leaf(t, 2, cap),
                }
            };
            super::series::of_term(f, 2, cap, &leaf)
        };
        let exact = (|| {
            let ts = exact_tower(twist, twists.len())?;
            let ls = exact_tower(spin, spins.len())?;
            let mut exact_blocks = Vec::new();
            for t in &ts {
                for l in &ls {
                    exact_blocks.push((t + l, l.to_integer().to_u32()?));
                }
            }
            Some(super::decompose::FourPointSeries {
                blocks: exact_blocks,
                delta12: ext.0.clone()?,
                delta34: ext.1.clone()?,
                twist_max: ts.last()?.clone(),
                spin_max: ls.last()?.to_integer().to_u32()?,
                g: &series_g,
            })
        })();
        let externals = crate::numeric::special::Externals {
            delta12: externals.0,
            delta34: externals.1,
        };
        super::decompose::fit_four_point(d, &blocks, externals, frame, &g, exact.as_ref())
    }

    /// The model's correlator `corr` expanded in its tensor structures
    /// ([`super::structures::fit`]): its components at configurations of
    /// given η. For ⟨T … ⟩ next to the wall, the wall limit is set beside
    /// the model's ⟨D(p) …⟩ with p where x meets the wall.
    pub fn structure_fit(
        &self,
        corr: &Term,
        setup: &super::structures::Setup,
        kept: &[super::structures::Structure],
        texts: &[String],
        relations: &[super::structures::Relation],
    ) -> Result<super::structures::StructureFit> {
        let Term::Corr(ops) = corr else {
            return Err(Error::new(
                ErrorKind::Numeric,
                "a decomposition takes a correlator",
            ));
        };
        let free: Vec<String> = ops
            .iter()
            .flat_map(|o| {
                o.indices
                    .iter()
                    .filter_map(|i| i.name().map(str::to_string))
            })
            .collect();
        let base = self.values().clone();
        let g = |cfg: &super::structures::Config<f64>| -> Result<Vec<f64>> {
            let mut v = base.clone();
            for (op, p) in ops.iter().zip(cfg) {
                v.points.insert(op.point.name.to_string(), p.clone());
            }
            let e = self.evaluate_with(corr, &free, &v)?;
            Ok(e.components.iter().map(|(_, x)| x.value).collect())
        };
        let bulk = ops.iter().position(|o| o.name == STRESS_TENSOR);
        let dims: Vec<f64> = setup
            .ops
            .iter()
            .map(|o| o.dim.as_ref().and_then(|r| r.to_f64()).unwrap_or(f64::NAN))
            .collect();
        let three = |k: usize| -> Result<f64> {
            // D where x meets the wall; the boundary points as placed.
            let mut state = 0x2545_f491_u64;
            let cfg = super::structures::random_config(setup, &mut state);
            let mut v = base.clone();
            let mut p = cfg[k].clone();
            if let Some(last) = p.last_mut() {
                *last = 0.0;
            }
            // A boundary point of the file that the correlator does not use.
            let spare = self
                .ctx
                .points
                .iter()
                .find(|q| q.boundary && ops.iter().all(|o| *o.point.name != *q.name))
                .ok_or_else(|| {
                    Error::new(
                        ErrorKind::Numeric,
                        "the wall limit needs a spare boundary point for D",
                    )
                    .with_note("declare one more: `boundary points s1 s2 s3`")
                })?;
            let (rank, _) = self.ctx.point(&spare.name).ok_or_else(|| {
                Error::new(
                    ErrorKind::Numeric,
                    "the spare boundary point is not declared",
                )
            })?;
            let mut replaced = ops.clone();
            replaced[k] = crate::term::Op {
                point: crate::term::Point {
                    rank,
                    par: false,
                    name: spare.name.as_str().into(),
                },
                name: crate::context::DISPLACEMENT.to_string(),
                indices: Vec::new(),
            };
            replaced.sort();
            for (i, (op, q)) in ops.iter().zip(&cfg).enumerate() {
                if i != k {
                    v.points.insert(op.point.name.to_string(), q.clone());
                }
            }
            v.points.insert(spare.name.clone(), p.clone());
            let value = self.value(&Term::Corr(replaced), &[], &v)?.value;
            let others: Vec<usize> = (0..ops.len()).filter(|&i| i != k).collect();
            let dist = |a: &[f64], b: &[f64]| -> f64 {
                a.iter()
                    .zip(b)
                    .map(|(x, y)| (x - y) * (x - y))
                    .sum::<f64>()
                    .sqrt()
            };
            let (i, j) = (others[0], others[1]);
            let (a, b, c) = (
                dims[i] + dims[j] - dims[k],
                dims[k] + dims[i] - dims[j],
                dims[k] + dims[j] - dims[i],
            );
            Ok(value
                * dist(&cfg[i], &cfg[j]).powf(a)
                * dist(&p, &cfg[i]).powf(b)
                * dist(&p, &cfg[j]).powf(c))
        };
        let wall = bulk.filter(|_| self.ctx.has_halfspace() && ops.len() == 3);
        let limit = wall.map(|k| move || three(k));
        super::structures::fit(
            setup,
            kept,
            texts,
            &g,
            limit.as_ref().map(|f| f as &dyn Fn() -> Result<f64>),
            relations,
            0x9e37_79b9,
        )
    }

    /// The values of `t` for every assignment of its free indices.
    pub fn evaluate(&self, t: &Term, free: &[String]) -> Result<Evaluation> {
        self.evaluate_with(t, free, self.values())
    }

    /// The values of `t` at several configurations, one per row: each row
    /// replaces scalar parameters and point positions of the current
    /// sample; points placed with parameters are placed again. Rows run on
    /// `jobs` threads; the result is in row order. A name the file does not
    /// declare, a position of the wrong length or one off its region (a
    /// boundary point above the wall, a bulk point on or below it) is an
    /// error naming the row.
    pub fn evaluate_rows(
        &self,
        t: &Term,
        free: &[String],
        rows: &[Row],
        jobs: usize,
    ) -> Result<Vec<Evaluation>> {
        let base = self.values();
        let results = crate::jobs::map_ordered(
            jobs,
            rows,
            true,
            |k, row| {
                let values = self.row_values(base, row).map_err(|e| {
                    let message = format!("row {k}: {}", e.message);
                    Error { message, ..e }
                })?;
                self.evaluate_with(t, free, &values)
            },
            &mut |_, _| {},
        );
        results.into_iter().collect()
    }

    fn row_values(&self, base: &Values, row: &Row) -> Result<Values> {
        let mut values = base.clone();
        for (name, v) in &row.scalars {
            if !self.ctx.parameters.contains(name) || self.ctx.params.contains_key(name) {
                return Err(Error::new(
                    ErrorKind::Numeric,
                    format!("`{name}` is not a scalar parameter of the file"),
                )
                .with_note("declare it with `parameters`"));
            }
            values.scalars.insert(name.clone(), *v);
        }
        place_moving(self.ctx, &mut values)?;
        for (name, at) in &row.points {
            let Some((_, decl)) = self.ctx.point(name) else {
                return Err(Error::new(
                    ErrorKind::Numeric,
                    format!("`{name}` is not a point of the file"),
                )
                .with_note("declare it with `points` (or `boundary points`)"));
            };
            if at.len() != values.dim {
                return Err(Error::new(
                    ErrorKind::Numeric,
                    format!(
                        "`{name}` has {} coordinates; dimension {} needs {}",
                        at.len(),
                        values.dim,
                        values.dim
                    ),
                ));
            }
            if let Some(y) = at.last().filter(|_| self.ctx.has_halfspace()) {
                let fine = if decl.boundary {
                    *y == 0.0
                } else {
                    y.is_finite() && *y > 0.0
                };
                if !fine {
                    let place = if decl.boundary {
                        "on the wall: its last coordinate must be 0"
                    } else {
                        "above the wall: its last coordinate must be positive"
                    };
                    return Err(Error::new(
                        ErrorKind::Numeric,
                        format!("`{name}` at normal coordinate {y} is not {place}"),
                    ));
                }
            }
            values.points.insert(name.clone(), at.clone());
        }
        Ok(values)
    }

    fn evaluate_with(&self, t: &Term, free: &[String], values: &Values) -> Result<Evaluation> {
        let mut components = Vec::new();
        for assignment in assignments(self.ctx, free, values.dim) {
            components.push((assignment.clone(), self.value(t, &assignment, values)?));
        }
        Ok(Evaluation { components })
    }

    /// Solves `lhs = rhs` for the parameter `unknown`, on which both sides
    /// depend linearly (a coefficient of the model, say): two evaluations
    /// fix the line, a third checks that it is one. Uses the component
    /// most sensitive to the unknown.
    pub fn solve(
        &self,
        unknown: &str,
        lhs: &Term,
        rhs: &Term,
        free: &[String],
    ) -> Result<Solution> {
        // Per component: left - right, and its noise (error estimates and
        // rounding bounds); a side that is not known stops the solve.
        let residual_noise = |a: f64| -> Result<Vec<(f64, f64)>> {
            let mut values = self.values().clone();
            values.scalars.insert(unknown.to_string(), a);
            let l = self.evaluate_with(lhs, free, &values)?;
            let r = self.evaluate_with(rhs, free, &values)?;
            l.components
                .iter()
                .zip(&r.components)
                .map(|((_, x), (_, y))| {
                    for (side, v) in [("left", x), ("right", y)] {
                        if let Some(loss) = v.loss() {
                            return Err(Error::new(
                                ErrorKind::Numeric,
                                format!(
                                    "cannot solve with `{unknown}` = {a}: {}",
                                    describe_loss(side, v, loss)
                                ),
                            ));
                        }
                    }
                    Ok((
                        x.value - y.value,
                        x.error + y.error + x.rounding + y.rounding,
                    ))
                })
                .collect()
        };
        let residual = |a: f64| -> Result<Vec<f64>> {
            Ok(residual_noise(a)?.into_iter().map(|(f, _)| f).collect())
        };
        let g0 = residual_noise(0.0)?;
        let g1 = residual_noise(1.0)?;
        let f0: Vec<f64> = g0.iter().map(|(f, _)| *f).collect();
        let f1: Vec<f64> = g1.iter().map(|(f, _)| *f).collect();
        let Some(k) =
            (0..f0.len()).max_by(|&i, &j| (f1[i] - f0[i]).abs().total_cmp(&(f1[j] - f0[j]).abs()))
        else {
            return Err(Error::new(ErrorKind::Numeric, "nothing to solve"));
        };
        let slope = f1[k] - f0[k];
        if slope == 0.0 || !slope.is_finite() {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!("neither side depends on `{unknown}`"),
            ));
        }
        let noise = ERROR_SAFETY * (g0[k].1 + g1[k].1);
        if noise > RESOLUTION * slope.abs() {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!(
                    "cannot solve for `{unknown}`: the equation changes by {slope:.3e} between `{unknown}` = 0 and 1, \
                     and its values are known only to {noise:.1e} (rounding and quadrature)"
                ),
            ));
        }
        let solution = -f0[k] / slope;
        // A line through f(0) and f(1) must also pass through f(2).
        let f2 = residual(2.0)?;
        let predicted = f0[k] + 2.0 * slope;
        let scale = f0[k].abs().max(slope.abs());
        if (f2[k] - predicted).abs() > LINEARITY_TOLERANCE * scale + noise {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!("the equation is not linear in `{unknown}`; solve only finds coefficients that enter linearly"),
            ));
        }
        let check = residual(solution)?;
        let component = assignments(self.ctx, free, self.values().dim)
            .into_iter()
            .nth(k)
            .unwrap_or_default();
        Ok(Solution {
            value: solution,
            component,
            residual: check.iter().fold(0.0f64, |m, x| m.max(x.abs())),
        })
    }

    /// Checks a local identity ∂[index](var) { body } = rhs the way
    /// docs/conventions.md §8 says: the flux of `body` through a sphere of `radius`
    /// around each insertion against the integral of `rhs` over the ball,
    /// and the divergence of the model's `body` away from the insertions.
    pub fn flux(
        &self,
        index: &Index,
        var: &Point,
        body: &Term,
        rhs: &Term,
        radius: &Term,
        free: &[String],
    ) -> Result<FluxReport> {
        let r = self.value(radius, &[], self.values())?.value;
        let mut around = Vec::new();
        for (rank, decl) in self.ctx.points.iter().enumerate() {
            let p = Point::named(rank as u32, decl.name.clone());
            if decl.boundary || p.name == var.name || !body.mentions_point(&p) {
                continue;
            }
            if !self.values().points.contains_key(&decl.name) {
                return Err(Error::new(
                    ErrorKind::Placement,
                    format!("`{}` has no position", decl.name),
                )
                .with_note(placement_note(self.ctx, &decl.name)));
            }
            let ball = Region::Ball(p.clone(), radius.clone());
            let surface = Term::Integral(Box::new(Integral {
                var: var.clone(),
                region: ball.clone(),
                surface: true,
                body: Term::Mul(vec![Term::OutNormal(index.clone()), body.clone()]),
            }));
            // The contact terms at p: the terms of the right side with a δ
            // at p (the sphere avoids every other insertion).
            let simplified = self.engine.simplify(rhs)?.term;
            let summands: Vec<Term> = match simplified {
                Term::Add(ts) => ts,
                t => vec![t],
            };
            let at_p: Vec<Term> = summands
                .into_iter()
                .filter(|t| has_delta_at(t, var, &p))
                .collect();
            let volume = Term::Integral(Box::new(Integral {
                var: var.clone(),
                region: ball,
                surface: false,
                body: Term::Add(at_p),
            }));
            around.push(FluxCheck {
                point: decl.name.to_string(),
                flux: self.evaluate(&surface, free)?,
                contact: self.evaluate(&volume, free)?,
            });
        }
        // Away from the insertions: 2r from each along the first axis.
        let modelled = apply(self.model.as_ref(), self.ctx, body)?;
        let divergence = normalize(
            self.ctx,
            &Term::Der(index.clone(), var.clone(), Box::new(modelled.clone())),
        )?;
        let field = normalize(self.ctx, &modelled)?;
        // The programs are the same at every check (only the position of
        // `var` moves): compiled on first use, by assignment and component.
        let mut divergences: std::collections::HashMap<usize, super::eval::Program> =
            std::collections::HashMap::new();
        let mut fields: std::collections::HashMap<(usize, usize), super::eval::Program> =
            std::collections::HashMap::new();
        let mut away = Vec::new();
        for check in &around {
            let mut at = self.values().points[&check.point].clone();
            at[0] += 2.0 * r;
            let clear = self.values().points.iter().all(|(n, q)| {
                **n == *var.name
                    || q.iter()
                        .zip(&at)
                        .map(|(a, b)| (a - b) * (a - b))
                        .sum::<f64>()
                        .sqrt()
                        > r
            });
            if !clear {
                continue;
            }
            let mut values = self.values().clone();
            values.points.insert(var.name.to_string(), at.clone());
            let mut largest = Value::exact(0.0);
            let mut scale: f64 = 0.0;
            for (a, assignment) in assignments(self.ctx, free, values.dim)
                .into_iter()
                .enumerate()
            {
                let program = match divergences.entry(a) {
                    std::collections::hash_map::Entry::Occupied(e) => e.into_mut(),
                    std::collections::hash_map::Entry::Vacant(e) => {
                        e.insert(compile(self.ctx, &divergence, &assignment, values.dim)?)
                    }
                };
                let b = program.eval_bounded(&values)?;
                if b.value.abs() >= largest.value.abs() {
                    largest.value = b.value;
                }
                largest.rounding = largest.rounding.max(if b.overflow {
                    f64::INFINITY
                } else {
                    b.rounding
                });
                largest.scale = largest.scale.max(b.scale);
                largest.underflow |= b.underflow;
                for k in 0..values.dim {
                    let mut with_index = assignment.clone();
                    if let Index::Named(name) = index {
                        with_index.push((name.to_string(), k));
                    }
                    let program = match fields.entry((a, k)) {
                        std::collections::hash_map::Entry::Occupied(e) => e.into_mut(),
                        std::collections::hash_map::Entry::Vacant(e) => {
                            e.insert(compile(self.ctx, &field, &with_index, values.dim)?)
                        }
                    };
                    scale = scale.max(program.eval(&values)?.abs() / r);
                }
            }
            away.push(Conservation { at, largest, scale });
        }
        Ok(FluxReport { around, away })
    }

    /// Both sides of `lhs = rhs` as `param` runs from `from` to `to` in
    /// `steps` equal steps, on up to `jobs` threads (the rows in order,
    /// the same with any number); `progress(done, total)` after each step.
    #[allow(clippy::too_many_arguments)]
    pub fn scan(
        &self,
        param: &str,
        from: f64,
        to: f64,
        steps: usize,
        lhs: &Term,
        rhs: &Term,
        free: &[String],
        jobs: usize,
        progress: &mut dyn FnMut(usize, usize),
    ) -> Result<Scan> {
        let xs: Vec<f64> = (0..steps)
            .map(|k| from + (to - from) * k as f64 / (steps - 1).max(1) as f64)
            .collect();
        let base = self.values();
        let results = crate::jobs::map_ordered(
            jobs,
            &xs,
            true,
            |_, &x| {
                let mut values = base.clone();
                values.scalars.insert(param.to_string(), x);
                place_moving(self.ctx, &mut values)?;
                let l = self.evaluate_with(lhs, free, &values)?;
                let r = self.evaluate_with(rhs, free, &values)?;
                Ok::<_, Error>((x, l, r))
            },
            progress,
        );
        let mut rows = Vec::with_capacity(steps);
        let mut judged = Vec::with_capacity(steps);
        let mut errors = Vec::with_capacity(steps);
        let mut labels = Vec::new();
        for result in results {
            let (x, l, r) = result?;
            if labels.is_empty() {
                labels = l.labels();
            }
            rows.push((
                x,
                l.components.iter().map(|(_, v)| v.value).collect(),
                r.components.iter().map(|(_, v)| v.value).collect(),
            ));
            let uncertain = |e: &Evaluation| -> Vec<f64> {
                e.components
                    .iter()
                    .map(|(_, v)| v.error + v.rounding)
                    .collect()
            };
            errors.push((uncertain(&l), uncertain(&r)));
            judged.push(
                l.components
                    .iter()
                    .zip(&r.components)
                    .map(|((_, a), (_, b))| (relative_difference(a, b), agreement(a, b)))
                    .collect(),
            );
        }
        Ok(Scan {
            param: param.to_string(),
            labels,
            rows,
            judged,
            errors,
        })
    }

    fn value(&self, t: &Term, free: &[(String, usize)], values: &Values) -> Result<Value> {
        match t {
            Term::Add(ts) => {
                let mut total = Value::exact(0.0);
                for t in ts {
                    let v = self.value(t, free, values)?;
                    total.value += v.value;
                    total.error += v.error;
                    total.nodes += v.nodes;
                    total.scale += v.scale;
                    total.rounding += v.rounding + f64::EPSILON * total.value.abs();
                    total.underflow |= v.underflow;
                    total.terms = total.terms.max(v.terms);
                }
                Ok(total)
            }
            // Fluxes and boundary-plane integrals by quadrature; volume
            // integrals through the local rules (δ sifting).
            Term::Integral(i) if i.surface || i.region == Region::Boundary => {
                self.integral(i, free, values)
            }
            Term::Mul(fs)
                if fs.iter().any(
                    |f| matches!(f, Term::Integral(i) if i.surface || i.region == Region::Boundary),
                ) =>
            {
                let mut total = Value::exact(1.0);
                for f in fs {
                    let v = self.value(f, free, values)?;
                    total.error = (total.error * v.value).abs() + (v.error * total.value).abs();
                    total.rounding = (total.rounding * v.value).abs()
                        + (v.rounding * total.value).abs()
                        + total.rounding * v.rounding
                        + f64::EPSILON * (total.value * v.value).abs();
                    total.scale *= v.scale;
                    total.underflow |= v.underflow;
                    total.terms = total.terms.max(v.terms);
                    total.value *= v.value;
                    total.nodes += v.nodes;
                }
                total.scale = total.scale.max(total.value.abs());
                Ok(total)
            }
            _ => {
                if let Some((a, b)) = coincident(t, values) {
                    return Err(Error::new(
                        ErrorKind::Placement,
                        format!(
                            "a correlator is evaluated with `{a}` and `{b}` at the same position, \
                             where it has no value"
                        ),
                    )
                    .with_note("place the points apart"));
                }
                let b = self.explicit(t, free)?.eval_bounded(values)?;
                let rounding = if b.overflow {
                    f64::INFINITY
                } else {
                    b.rounding
                };
                Ok(Value {
                    value: b.value,
                    error: 0.0,
                    nodes: 0,
                    // One part: what cancels inside it is judged against
                    // the value itself.
                    scale: b.value.abs(),
                    rounding,
                    underflow: b.underflow,
                    terms: b.scale,
                })
            }
        }
    }

    /// Rules, normalisation, the model, normalisation, compilation.
    fn explicit(&self, t: &Term, free: &[(String, usize)]) -> Result<Arc<super::eval::Program>> {
        let key = (t.clone(), free.to_vec());
        if let Some(p) = self
            .compiled_cache
            .lock()
            .ok()
            .and_then(|c| c.get(&key).cloned())
        {
            return Ok(p);
        }
        let p = Arc::new(self.explicit_uncached(t, free)?);
        if let Ok(mut cache) = self.compiled_cache.lock() {
            cache.insert(key, Arc::clone(&p));
        }
        Ok(p)
    }

    /// The model's explicit, normalised term for `t` (cached).
    fn explicit_term(&self, t: &Term) -> Result<Term> {
        // The symbolic work is the same for every component and sample.
        // Threads that miss at once both do the work; the results are equal.
        let cached = self
            .explicit_cache
            .lock()
            .ok()
            .and_then(|c| c.get(t).cloned());
        Ok(match cached {
            Some(e) => e,
            None => {
                let simplified = self.engine.simplify(t)?.term;
                let modelled = apply(self.model.as_ref(), self.ctx, &simplified)?;
                let e = normalize(self.ctx, &modelled)?;
                if let Ok(mut cache) = self.explicit_cache.lock() {
                    cache.insert(t.clone(), e.clone());
                }
                e
            }
        })
    }

    /// The exact value of a term of numbers, `d` and parameters with
    /// rational values (`values`), for the series solve of `decompose`.
    fn exact_number(&self, t: &Term) -> Option<Q> {
        let cap = Q::one();
        super::series::of_term(t, 0, &cap, &|t| self.exact_leaf(t, 0, &cap))?.constant_value()
    }

    /// `d` and the parameters with rational values as constant series.
    fn exact_leaf(&self, t: &Term, n: usize, cap: &Q) -> Option<Series> {
        match t {
            Term::Sym(s) if s == DIMENSION => Some(Series::constant(
                Q::from_integer(self.values().dim.into()),
                n,
                cap,
            )),
            Term::Sym(s) => {
                let v = self.exact.get(s)?;
                // Only while the value in force is the one given.
                let now = self.values().scalars.get(s)?;
                (super::series::to_f64(v) == *now).then(|| Series::constant(v.clone(), n, cap))
            }
            _ => None,
        }
    }

    fn explicit_uncached(
        &self,
        t: &Term,
        free: &[(String, usize)],
    ) -> Result<super::eval::Program> {
        let explicit = self.explicit_term(t)?;
        compile(self.ctx, &explicit, free, self.values().dim)
    }

    fn integral(&self, i: &Integral, free: &[(String, usize)], values: &Values) -> Result<Value> {
        if !(MIN_DIM..=MAX_DIM).contains(&values.dim) {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!(
                    "numeric integrals over spheres and the boundary plane are done in dimensions \
                     {MIN_DIM} to {MAX_DIM}, and this file is in dimension {}",
                    values.dim
                ),
            )
            .with_note(format!(
                "the rules grow with the dimension; check this identity in d ≤ {MAX_DIM}, \
                 or without an integral (the local form, with `compare`)"
            )));
        }
        let (surface, body) = match (&i.region, i.surface) {
            (Region::Ball(center, radius), true) => {
                let c = self.position(center)?;
                let r = self.value(radius, &[], values)?.value;
                let on_wall = self.ctx.is_boundary_point(center);
                // Next to a wall a sphere around a bulk point must stay in
                // the bulk. Around a boundary point the surface is the
                // hemisphere: the disc on the wall that would close it
                // carries T_nν there, which vanishes for parallel ν (no flow
                // across a conformal boundary, T_na = 0 on the wall; common
                // practice) and is the displacement operator for ν = n,
                // whose term the local identity states separately.
                let height = c.last().copied().unwrap_or(0.0);
                if self.ctx.has_halfspace() && !on_wall && height - r <= 1e-6 * r {
                    return Err(Error::new(
                        ErrorKind::Placement,
                        format!(
                            "the sphere of radius {r} around `{}` reaches the wall: `{}` is only {height} from it",
                            center.name, center.name
                        ),
                    )
                    .with_note("use a radius smaller than the distance to the wall"));
                }
                // Poles towards the nearest other insertion: the integrand
                // then varies mostly with one variable.
                let others: Vec<Vec<f64>> = values
                    .points
                    .iter()
                    .filter(|(name, _)| **name != *i.var.name && **name != *center.name)
                    .map(|(_, p)| p.iter().zip(&c).map(|(a, b)| a - b).collect::<Vec<f64>>())
                    .filter(|v| v.iter().any(|a| *a != 0.0))
                    .collect();
                let nearest = others
                    .iter()
                    .min_by(|a, b| norm(a).total_cmp(&norm(b)))
                    .cloned();
                let surface = if on_wall {
                    Surface::hemisphere(&c, r)
                } else {
                    match nearest {
                        // With a second insertion off the axis, the product
                        // rules (d ≤ 6): the sparse grid's estimate is not
                        // to be trusted there.
                        Some(axis) if others.len() > 1 => {
                            Surface::sphere_along(&c, r, &axis).map(Surface::with_product_rules)
                        }
                        Some(axis) => Surface::sphere_along(&c, r, &axis),
                        None => Surface::sphere(&c, r),
                    }
                }
                .map_err(quadrature_error)?;
                // The outward normal comes with each node.
                let body = replace_normal(&i.body, &|k: &Index| Term::Param(NORMAL_VALUE.to_string(), vec![k.clone()]));
                (surface, body)
            }
            (Region::Boundary, false) => {
                let (centre, scale) = self.plane_centre(&i.body)?;
                (Surface::plane(&centre, scale).map_err(quadrature_error)?, i.body.clone())
            }
            _ => {
                return Err(Error::new(
                    ErrorKind::Placement,
                    "numerically, integrals run over spheres `∮[x on ball(c, r)]` and the boundary plane `∫[x∥ in boundary]`",
                ))
            }
        };
        let avoid: Vec<(String, Vec<f64>)> = values
            .points
            .iter()
            .filter(|(name, _)| **name != *i.var.name)
            .map(|(n, p)| (n.clone(), p.clone()))
            .collect();
        let avoid_refs: Vec<(&str, &[f64])> = avoid
            .iter()
            .map(|(n, p)| (n.as_str(), p.as_slice()))
            .collect();
        if let Region::Ball(..) = i.region {
            // A surface through an insertion is the input's mistake.
            surface
                .check_clear(&avoid_refs, 1e-6)
                .map_err(|e| Error::new(ErrorKind::Placement, e.to_string()))?;
        }
        let program = self.explicit(&body, free)?;
        let batch = program.batch(values, &i.var.name, Some(NORMAL_VALUE))?;
        let mut sampled = values.clone();
        let mut failure = None;
        // The integrand's rounding, at every ROUNDING_SAMPLE-th node: the
        // largest bound and the largest value seen there.
        let mut count = 0usize;
        let mut noise = (0.0f64, 0.0f64, false);
        let dim = values.dim;
        let estimate = integrate_batch(
            &surface,
            |points, normals, out| {
                if failure.is_some() {
                    out.fill(f64::NAN);
                    return;
                }
                if let Err(e) = batch.eval(points, normals, out) {
                    failure = Some(e);
                    out.fill(f64::NAN);
                    return;
                }
                // Node k of the whole integration carries a rounding bound
                // when k is a multiple of ROUNDING_SAMPLE.
                let first = count.next_multiple_of(ROUNDING_SAMPLE) - count;
                for k in (first..out.len()).step_by(ROUNDING_SAMPLE) {
                    sampled.points.insert(
                        i.var.name.to_string(),
                        points[k * dim..(k + 1) * dim].to_vec(),
                    );
                    sampled.tensors.insert(
                        NORMAL_VALUE.to_string(),
                        normals[k * dim..(k + 1) * dim].to_vec(),
                    );
                    match program.eval_bounded(&sampled) {
                        Ok(b) => {
                            let (e, f, under) = noise;
                            let e = if b.overflow {
                                f64::INFINITY
                            } else {
                                e.max(b.rounding)
                            };
                            noise = (e, f.max(b.value.abs()), under || b.underflow);
                            out[k] = b.value;
                        }
                        Err(e) => {
                            failure = Some(e);
                            out.fill(f64::NAN);
                            return;
                        }
                    }
                }
                count += out.len();
            },
            Tolerance::relative(self.tolerance)
                .with_abs(QUADRATURE_FLOOR * self.tolerance)
                .with_max_nodes(QUADRATURE_BUDGET),
        );
        if let Some(e) = failure {
            return Err(e);
        }
        if !estimate.converged {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!(
                    "quadrature did not converge: {} ± {:.1e} after {} evaluations",
                    estimate.value, estimate.error, estimate.nodes
                ),
            )
            .with_note("move the surface away from the insertions, or change its size"));
        }
        // The integral inherits the integrand's relative rounding, against
        // Σ|w f|.
        let (largest_rounding, largest_value, underflow) = noise;
        let magnitude = estimate.magnitude.max(estimate.value.abs());
        let rounding = if largest_value > 0.0 {
            largest_rounding / largest_value * magnitude
        } else {
            largest_rounding
        };
        Ok(Value {
            value: estimate.value,
            error: estimate.error,
            nodes: estimate.nodes,
            scale: magnitude,
            rounding: if rounding.is_nan() {
                f64::INFINITY
            } else {
                rounding
            },
            underflow,
            terms: magnitude,
        })
    }

    /// Conformal perturbation theory in g ∫ O over the wall
    /// (docs/conventions.md §17): the correlator `corr` of the model and
    /// its corrections through `order`, each at the coupling's value, with
    /// the quadrature's error estimates. O is the product of `operators` at
    /// one point, integrated at `points` (one per order).
    pub fn perturb(
        &self,
        corr: &Term,
        coupling: &Term,
        operators: &[String],
        points: &[Point],
        order: usize,
    ) -> Result<Vec<super::perturb::OrderTerm>> {
        use super::perturb::{scaled, singular_terms, Double, OrderTerm, PowerDivergence};
        let values = self.values().clone();
        let dim = values.dim;
        if !(MIN_DIM..=MAX_DIM).contains(&dim) {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!("integrals over the wall are done in dimensions {MIN_DIM} to {MAX_DIM}, and this file is in dimension {dim}"),
            ));
        }
        let g = self.value(coupling, &[], &values)?.value;
        let Term::Corr(x) = corr else {
            return Err(Error::new(
                ErrorKind::Numeric,
                "`perturb` takes one correlator",
            ));
        };
        let insertions: Vec<Vec<f64>> = x
            .iter()
            .map(|op| self.position(&op.point))
            .collect::<Result<_>>()?;
        let started = std::time::Instant::now();
        let zeroth = self.value(corr, &[], &values)?;
        let mut out = vec![OrderTerm {
            order: 0,
            value: zeroth,
            log: None,
            powers: Vec::new(),
            seconds: started.elapsed().as_secs_f64(),
        }];
        // The factors of O after the first sit at auxiliary points of their
        // own while the model contracts (it refuses two insertions at one
        // point), moved onto the integration point afterwards. '#' cannot
        // occur in a declared name; `par` marks them as on the wall.
        let aux = |p: &Point, k: usize| Point {
            rank: p.rank,
            par: true,
            name: format!("{}#{k}", p.name).into(),
        };
        let mut back = std::collections::BTreeMap::new();
        for p in points {
            for k in 1..operators.len() {
                back.insert(aux(p, k).name, p.clone());
            }
        }
        let o_at = |p: &Point| -> Vec<crate::term::Op> {
            operators
                .iter()
                .enumerate()
                .map(|(k, name)| crate::term::Op {
                    point: if k == 0 { p.clone() } else { aux(p, k) },
                    name: name.clone(),
                    indices: Vec::new(),
                })
                .collect()
        };
        let corr_of = |parts: &[&Point], with_x: bool| -> Term {
            let mut ops = if with_x { x.clone() } else { Vec::new() };
            for p in parts {
                ops.extend(o_at(p));
            }
            Term::Corr(ops)
        };
        let neg = |t: Term| Term::Mul(vec![Term::int(-1), t]);
        let tol = Tolerance::relative(self.tolerance).with_abs(QUADRATURE_FLOOR * self.tolerance);
        let frame = super::perturb::plane_frame(&insertions).ok_or_else(|| {
            Error::new(
                ErrorKind::Placement,
                "`perturb` needs an insertion of the correlator off the wall",
            )
        })?;
        // First order: -g ∫ dz (⟨X O⟩ - ⟨X⟩⟨O⟩).
        let started = std::time::Instant::now();
        let z1 = &points[0];
        let k1 = Term::Add(vec![
            corr_of(&[z1], true),
            neg(Term::Mul(vec![corr.clone(), corr_of(&[z1], false)])),
        ]);
        let k1 = self.connected_form(&k1, operators, &back)?;
        let first = if k1.is_zero() {
            Value::exact(0.0)
        } else {
            let program = compile(self.ctx, &k1, &[], dim)?;
            let e = super::perturb::plane_integral(&program, &values, &z1.name, &frame, tol)?;
            scaled(&e, 0.0, -g)
        };
        out.push(OrderTerm {
            order: 1,
            value: first,
            log: None,
            powers: Vec::new(),
            seconds: started.elapsed().as_secs_f64(),
        });
        if order < 2 {
            return Ok(out);
        }
        // Second order: (g²/2) ∫∫ dz dz' κ(X, O(z), O(z')).
        let started = std::time::Instant::now();
        let z2 = &points[1];
        let c = |ps: &[&Point], with_x: bool| corr_of(ps, with_x);
        let k2 = Term::Add(vec![
            c(&[z1, z2], true),
            neg(Term::Mul(vec![corr.clone(), c(&[z1, z2], false)])),
            neg(Term::Mul(vec![c(&[z1], true), c(&[z2], false)])),
            neg(Term::Mul(vec![c(&[z2], true), c(&[z1], false)])),
            Term::Mul(vec![
                Term::int(2),
                corr.clone(),
                c(&[z1], false),
                c(&[z2], false),
            ]),
        ]);
        let k2 = self.connected_form(&k2, operators, &back)?;
        let half_g2 = 0.5 * g * g;
        let second = if k2.is_zero() {
            OrderTerm {
                order: 2,
                value: Value::exact(0.0),
                log: None,
                powers: Vec::new(),
                seconds: 0.0,
            }
        } else {
            let singular = singular_terms(&k2, z1, z2, dim).map_err(|why| {
                Error::new(
                    ErrorKind::Numeric,
                    format!("the second-order integrand: {why}"),
                )
            })?;
            let full = compile(self.ctx, &k2, &[], dim)?;
            let residues: Vec<(f64, super::eval::Program)> = singular
                .iter()
                .map(|s| {
                    let t = normalize(self.ctx, &s.residue)?;
                    Ok((s.exponent, compile(self.ctx, &t, &[], dim)?))
                })
                .collect::<Result<_>>()?;
            let double = Double {
                full: &full,
                singular: residues.iter().map(|(q, p)| (*q, p)).collect(),
                first: &z1.name,
                second: &z2.name,
                insertions: insertions.clone(),
            };
            let key = format!(
                "{k2:?}|{}|{}|{values:?}|{:e}",
                z1.name, z2.name, self.tolerance
            );
            let cached = self
                .double_cache
                .lock()
                .ok()
                .and_then(|c| c.get(&key).cloned());
            let r = match cached {
                Some(r) => r,
                None => {
                    let r = double.integrate(
                        &values,
                        self.tolerance,
                        QUADRATURE_FLOOR * self.tolerance,
                    )?;
                    if let Ok(mut c) = self.double_cache.lock() {
                        c.insert(key, r.clone());
                    }
                    r
                }
            };
            let mut value = scaled(&r.finite, r.inner_error, half_g2);
            value.nodes = r.evaluations;
            OrderTerm {
                order: 2,
                value,
                log: Some(match &r.log {
                    Some(e) => scaled(e, 0.0, half_g2),
                    None => Value::exact(0.0),
                }),
                powers: r
                    .powers
                    .iter()
                    .map(|(k, e)| PowerDivergence {
                        exponent: *k,
                        coefficient: scaled(e, 0.0, half_g2),
                        converged: e.converged,
                    })
                    .collect(),
                seconds: 0.0,
            }
        };
        out.push(OrderTerm {
            seconds: started.elapsed().as_secs_f64(),
            ..second
        });
        Ok(out)
    }

    /// The explicit normal form of a connected correlator of `perturb`,
    /// refused when the model contracts the factors of the perturbing
    /// operator with one another (a distance from a point to itself).
    fn connected_form(
        &self,
        t: &Term,
        operators: &[String],
        back: &std::collections::BTreeMap<crate::term::Name, Point>,
    ) -> Result<Term> {
        // Scalars only, so no Ward rule applies: straight to the model.
        let modelled = apply(self.model.as_ref(), self.ctx, t)?;
        let e = normalize(self.ctx, &modelled)?;
        let e = normalize(self.ctx, &super::models::substitute_points(&e, back))?;
        if self_distance(&e) {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!(
                    "the model contracts the factors of the perturbing operator {} with one another at one point",
                    operators.join(" ")
                ),
            )
            .with_note(
                "perturb by factors the unperturbed model does not contract, as φ̂ χ with \
                 `model free-scalar neumann coupling 0` (the coupling written as 0)",
            ));
        }
        Ok(e)
    }

    /// Centre and width of the boundary-plane rule: below the bulk point
    /// nearest to the wall among those the integrand involves.
    fn plane_centre(&self, body: &Term) -> Result<(Vec<f64>, f64)> {
        let mut best: Option<(Vec<f64>, f64)> = None;
        for (name, p) in &self.values().points {
            let bulk = self.ctx.point(name).is_some_and(|(_, d)| !d.boundary);
            let rank = self.ctx.point(name).map_or(0, |(r, _)| r);
            if !bulk || !body.mentions_point(&Point::named(rank, name.clone())) {
                continue;
            }
            let y = p.last().copied().unwrap_or(0.0);
            if best.as_ref().map_or(true, |(_, s)| y < *s) {
                let mut c = p.clone();
                if let Some(last) = c.last_mut() {
                    *last = 0.0;
                }
                best = Some((c, y));
            }
        }
        best.ok_or_else(|| {
            Error::new(
                ErrorKind::Placement,
                "an integral over the boundary plane needs a bulk insertion with a position (`place x1 at (…)`)",
            )
        })
    }

    fn position(&self, p: &Point) -> Result<Vec<f64>> {
        self.values().points.get(&*p.name).cloned().ok_or_else(|| {
            Error::new(
                ErrorKind::Placement,
                format!("`{}` has no position", p.name),
            )
            .with_note(placement_note(self.ctx, &p.name))
        })
    }
}

/// True if a distance from a point to itself occurs in the term.
fn self_distance(t: &Term) -> bool {
    match t {
        Term::Dist(p, q) => p.name == q.name,
        Term::Pow(a, b) => self_distance(a) || self_distance(b),
        Term::Mul(ts) | Term::Add(ts) | Term::Fun(_, _, ts) => ts.iter().any(self_distance),
        Term::Der(_, _, body) => self_distance(body),
        Term::Integral(i) => self_distance(&i.body),
        _ => false,
    }
}

/// The model a file asked for.
/// Two insertions of one correlator at the same position, by name.
fn coincident(t: &Term, values: &Values) -> Option<(String, String)> {
    let at = |p: &Point| -> Option<Vec<f64>> {
        let mut v = values.points.get(&*p.name)?.clone();
        if p.par {
            if let Some(y) = v.last_mut() {
                *y = 0.0;
            }
        }
        Some(v)
    };
    match t {
        Term::Corr(ops) => ops.iter().enumerate().find_map(|(k, a)| {
            let pa = at(&a.point)?;
            ops[k + 1..].iter().find_map(|b| {
                (b.point.name != a.point.name && at(&b.point)? == pa)
                    .then(|| (a.point.name.to_string(), b.point.name.to_string()))
            })
        }),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().find_map(|t| coincident(t, values)),
        Term::Der(_, _, body) => coincident(body, values),
        Term::Pow(a, b) => coincident(a, values).or_else(|| coincident(b, values)),
        Term::Integral(i) => coincident(&i.body, values),
        _ => None,
    }
}

/// The model a file's `model` line chooses, with the file's declared
/// coefficients and operator mapping. A session builds its model with it;
/// tests that evaluate model correlators by a route of their own
/// (`tests/sweep.rs`) build it directly.
pub fn build_model(
    ctx: &Context,
    choice: &ModelChoice,
    spec: &NumericSpec,
) -> Result<Box<dyn Model + Send + Sync>> {
    Ok(match choice {
        ModelChoice::Conformal { y_convention } => {
            let convention = if *y_convention {
                Convention::Y
            } else {
                Convention::TwoY
            };
            let mut model = Conformal::new(convention);
            let boundary = |name: &str| ctx.operator(name).is_some_and(|o| o.boundary);
            for (names, value) in &spec.coefficients {
                let v = value.clone();
                model = match &names[..] {
                    [o] => model.one_point(o, v),
                    [t, o] if t == STRESS_TENSOR && o != STRESS_TENSOR => {
                        model.stress_one_point(o, v)
                    }
                    [a, b] if boundary(a) && boundary(b) => model.boundary_two_point(a, b, v),
                    [a, b] if boundary(b) => model.bulk_to_boundary(a, b, v),
                    [a, b] if boundary(a) => model.bulk_to_boundary(b, a, v),
                    [a, b] => model.two_point(a, b, v),
                    [t, a, b] if t == STRESS_TENSOR => model.stress_coupling(a, b, v),
                    [w, a, b] if ctx.operator(w).is_some_and(|o| o.rank == 1 && !o.boundary) => {
                        model.vector_scalar_scalar(w, a, b, v)
                    }
                    [a, b, c] => model.three_point([a, b, c], v),
                    _ => model,
                };
            }
            Box::new(model)
        }
        ModelChoice::Gff { dirichlet } => {
            Box::new(super::models::gff::Gff::new(dirichlet.map(|d| {
                if d {
                    -1
                } else {
                    1
                }
            })))
        }
        ModelChoice::FreeScalar {
            dirichlet,
            complex,
            unimproved,
            fields,
            family,
        } => {
            let mut mapping = Mapping::new();
            for (name, composite) in fields {
                let c = match composite.as_str() {
                    "phi" => Composite::Field,
                    "phi2" => Composite::FieldSquared,
                    "phibar" => Composite::FieldBar,
                    "current" => Composite::Current,
                    "boundary-current" => Composite::BoundaryCurrent,
                    "stress" => Composite::Stress,
                    "boundary-phi" => Composite::BoundaryField,
                    "boundary-dphi" => Composite::BoundaryNormalDerivative,
                    "boundary-tn" => Composite::WallStress,
                    "chi" => Composite::Chi,
                    _ => Composite::BoundaryFieldSquared,
                };
                mapping = mapping.with(name, c);
            }
            let wall = dirichlet.map(|d| if d { Wall::Dirichlet } else { Wall::Neumann });
            let mut model = match family {
                None => FreeScalar::new(wall, mapping),
                Some(Family::Reflection(rho)) => {
                    FreeScalar::reflecting(Reflection::constant(rho.clone()), mapping)
                }
                Some(Family::Coupling { dirichlet, g }) => {
                    let side = if *dirichlet {
                        Wall::Dirichlet
                    } else {
                        Wall::Neumann
                    };
                    FreeScalar::reflecting(Reflection::coupled(side, g.clone(), ctx), mapping)
                }
            };
            if *unimproved {
                model = model.unimproved();
            }
            if *complex {
                model = model.complex();
            }
            // The model serves this file only: it may remember its work.
            Box::new(model.remembering())
        }
    })
}

/// Numeric values: parameters, S_d, d, and point positions.
fn values(ctx: &Context, spec: &NumericSpec) -> Result<Values> {
    let dim = match &ctx.dimension {
        Some(Term::Num(d)) => d.to_usize(),
        _ => spec
            .values
            .get(DIMENSION)
            .and_then(|v| v.first())
            .and_then(|d| d.to_usize()),
    }
    .ok_or_else(|| {
        Error::new(ErrorKind::Numeric, "numeric work needs a numeric dimension")
            .with_note("declare `dimension 4`, or give `values d = 4`")
    })?;
    let mut out = Values {
        dim,
        ..Values::default()
    };
    for (name, components) in &spec.values {
        let floats: Vec<f64> = components
            .iter()
            .map(|c| c.to_f64().unwrap_or(f64::NAN))
            .collect();
        if ctx.params.contains_key(name) {
            out.tensors.insert(name.clone(), floats);
        } else if let [v] = floats[..] {
            out.scalars.insert(name.clone(), v);
        } else {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!("`{name}` is a scalar and takes one value"),
            ));
        }
    }
    for name in ctx.params.keys() {
        if let Some(k) = crate::lower::unit_vector_component(name) {
            if k >= dim {
                return Err(Error::new(
                    ErrorKind::Numeric,
                    format!("component {k} does not exist in dimension {dim}: components run from 0 to {}", dim - 1),
                ));
            }
            let mut e = vec![0.0; dim];
            e[k] = 1.0;
            out.tensors.insert(name.clone(), e);
        }
    }
    out.scalars
        .insert(SPHERE_AREA.to_string(), sphere_area(dim));
    out.scalars.insert(DIMENSION.to_string(), dim as f64);
    for (name, coords) in &ctx.positions {
        out.points.insert(
            name.clone(),
            coords
                .iter()
                .map(|c| c.to_f64().unwrap_or(f64::NAN))
                .collect(),
        );
    }
    place_moving(ctx, &mut out)?;
    Ok(out)
}

/// What to do about a point without a position.
fn placement_note(ctx: &Context, name: &str) -> String {
    if ctx.moving.contains_key(name) {
        format!("`{name}` is placed with parameters that have no value here: give them one with `values`, or scan over them")
    } else {
        format!("give one: `place {name} at (…)`")
    }
}

/// Works out the positions that depend on parameters (`place x at (0, 0,
/// h)`) from the parameters' current values. A point whose parameters have
/// no value yet (a `scan` gives them) stays unplaced.
fn place_moving(ctx: &Context, values: &mut Values) -> Result<()> {
    for (name, coords) in &ctx.moving {
        fn known(t: &Term, values: &Values) -> bool {
            match t {
                Term::Sym(s) => values.scalars.contains_key(s),
                Term::Add(ts) | Term::Mul(ts) => ts.iter().all(|t| known(t, values)),
                Term::Pow(a, b) => known(a, values) && known(b, values),
                _ => true,
            }
        }
        let known = coords.iter().all(|c| known(c, values));
        if !known {
            values.points.remove(name);
            continue;
        }
        let mut at = Vec::with_capacity(coords.len());
        for c in coords {
            at.push(compile(ctx, c, &[], values.dim)?.eval(values)?);
        }
        if at.len() != values.dim {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!(
                    "`{name}` is placed with {} coordinates in dimension {}",
                    at.len(),
                    values.dim
                ),
            ));
        }
        if let Some(y) = at.last().filter(|_| ctx.has_halfspace()) {
            if y.is_nan() || *y <= 0.0 {
                return Err(Error::new(
                    ErrorKind::Placement,
                    format!("`{name}` is at distance {y} from the wall: a bulk point must be above it"),
                )
                .with_note("its position depends on a parameter; keep the parameter where the normal coordinate is positive"));
            }
        }
        values.points.insert(name.clone(), at);
    }
    Ok(())
}

/// `count` sets of values: declared positions kept, the other points at
/// seeded random positions (bulk points at heights 1/4 to 5/4 above a
/// wall, boundary points on it), at least 1/4 apart.
fn random_samples(ctx: &Context, base: &Values, count: usize, seed: u64) -> Result<Vec<Values>> {
    let mut state = seed;
    let mut next = move || super::splitmix(&mut state);
    let mut out = Vec::with_capacity(count);
    for _ in 0..count {
        let mut values = base.clone();
        for decl in &ctx.points {
            if values.points.contains_key(&*decl.name) {
                continue;
            }
            let mut tries = 0;
            let p = loop {
                let mut p: Vec<f64> = (0..base.dim).map(|_| 2.0 * next() - 1.0).collect();
                if ctx.has_halfspace() {
                    let y = if decl.boundary { 0.0 } else { 0.25 + next() };
                    if let Some(last) = p.last_mut() {
                        *last = y;
                    }
                }
                let clear = values.points.values().all(|q| {
                    q.iter()
                        .zip(&p)
                        .map(|(a, b)| (a - b) * (a - b))
                        .sum::<f64>()
                        > 1.0 / 16.0
                });
                tries += 1;
                if clear || tries > 1000 {
                    break p;
                }
            };
            values.points.insert(decl.name.to_string(), p);
        }
        out.push(values);
    }
    if out.is_empty() {
        return Err(Error::new(
            ErrorKind::Numeric,
            "`sample` needs at least one sample",
        ));
    }
    Ok(out)
}

/// Every assignment of numeric values to the free indices.
fn assignments(ctx: &Context, free: &[String], dim: usize) -> Vec<Vec<(String, usize)>> {
    let mut out = vec![Vec::new()];
    for name in free {
        let range = match ctx.index_kind(name) {
            IndexKind::Bulk => dim,
            IndexKind::Parallel => dim.saturating_sub(1),
        };
        out = out
            .into_iter()
            .flat_map(|a: Vec<(String, usize)>| {
                (0..range).map(move |k| {
                    let mut next = a.clone();
                    next.push((name.clone(), k));
                    next
                })
            })
            .collect();
    }
    out
}

/// True if `t` holds δ(var - p) (possibly differentiated).
fn has_delta_at(t: &Term, var: &Point, p: &Point) -> bool {
    match t {
        Term::DeltaFn(a, b) => {
            (a.name == var.name && b.name == p.name) || (b.name == var.name && a.name == p.name)
        }
        Term::Mul(ts) | Term::Add(ts) => ts.iter().any(|t| has_delta_at(t, var, p)),
        Term::Der(_, _, body) => has_delta_at(body, var, p),
        _ => false,
    }
}

/// Replaces the outward normal N[k] by an explicit vector.
fn replace_normal(t: &Term, normal: &dyn Fn(&Index) -> Term) -> Term {
    let sub = |t: &Term| replace_normal(t, normal);
    match t {
        Term::OutNormal(k) => normal(k),
        Term::Mul(ts) => Term::Mul(ts.iter().map(sub).collect()),
        Term::Add(ts) => Term::Add(ts.iter().map(sub).collect()),
        Term::Pow(a, b) => Term::Pow(Box::new(sub(a)), Box::new(sub(b))),
        Term::Der(i, p, body) => Term::Der(i.clone(), p.clone(), Box::new(sub(body))),
        other => other.clone(),
    }
}

fn norm(v: &[f64]) -> f64 {
    v.iter().map(|a| a * a).sum::<f64>().sqrt()
}

fn quadrature_error(e: super::quadrature::QuadratureError) -> Error {
    Error::new(ErrorKind::Numeric, e.to_string())
}

/// A tower of twists and spins reached the wall channels' code.
fn unreachable_dims() -> Result<(Vec<f64>, bool)> {
    Err(Error::new(
        ErrorKind::Numeric,
        "twists and spins are the s-channel's",
    ))
}

/// True if the symbol `name` occurs in `t`.
fn mentions_symbol(t: &Term, name: &str) -> bool {
    match t {
        Term::Sym(s) => s == name,
        Term::Pow(a, b) => mentions_symbol(a, name) || mentions_symbol(b, name),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().any(|s| mentions_symbol(s, name)),
        Term::Fun(_, _, args) => args.iter().any(|s| mentions_symbol(s, name)),
        _ => false,
    }
}
