//! Conformal perturbation theory in a coupling on the wall
//! (docs/conventions.md §17): the corrections to a correlator ⟨X⟩ from
//! g ∫ d^{d-1}z O(z) added to the action, as integrals over the boundary
//! plane of the unperturbed model's connected correlators,
//!
//! ```text
//! δ₁⟨X⟩ = -g ∫ dz ⟨X O(z)⟩_c,
//! δ₂⟨X⟩ = (g²/2) ∫∫ dz dz' ⟨X O(z) O(z')⟩_c,
//! ```
//!
//! with X of bulk insertions only (the integrands are then smooth except
//! where z' meets z).
//!
//! **The cutoff at z' = z.** The explicit connected correlator is a sum of
//! monomials; in each, the dependence on both integration points is a
//! power |z - z'|^q times a factor G(z, z') smooth at z' = z (this is
//! checked, not assumed: a factor of any other shape is refused). With
//! |z - z'| > ε, a monomial with q + d - 1 = k ≤ 0 diverges:
//!
//! ```text
//! ∫_{|u|>ε} d^{d-1}u |u|^q G(z, z + u)
//!     = S_{d-1} G(z, z) (-ε^k/k  or  ln(1/ε)) + finite + O(ε^{k+2}),
//! ```
//!
//! the odd terms of G in u dropping out of the sphere average (the
//! integrand is symmetrised in u → -u) and the even ones being integrable
//! for -2 < k. The finite part is computed as
//!
//! ```text
//! ∫ du [½(F(z, z+u) + F(z, z-u)) - Σ G(z, z) |u|^q e^{-|u|²/R²}]
//!     + Σ S_{d-1} G(z, z) · (½ R^k Γ(k/2)  or  ln R - γ/2),
//! ```
//!
//! R any width (here the distance from z to the nearest insertion of X),
//! the second line being the Gaussian's own integral outside ε with its
//! divergent term dropped. That is the Hadamard finite part, which equals
//! analytic regularisation when k ≠ 0 (the boundary "mass" power
//! divergence -ε^k/k is a counterterm of the boundary operator O×O
//! produces, tuned away); at k = 0 the coefficient of ln(1/ε) is reported
//! apart: an anomalous dimension or a running of the coupling (derived;
//! common practice for the power divergences).

use std::f64::consts::PI;

use serde::Serialize;

use super::agreement::Value;
use super::eval::Program;
use super::quadrature::{integrate_batch, Estimate, Surface, Tolerance};
use super::Values;
use crate::diagnostic::{Error, ErrorKind};
use crate::term::{Point, Term};

/// Euler's constant γ (common practice).
const EULER_GAMMA: f64 = 0.577_215_664_901_532_9;

/// One monomial family of the connected correlator that diverges at
/// z' = z: |z - z'|^exponent times `residue` = G(z, z) (z' put at z).
#[derive(Clone, Debug)]
pub struct SingularTerm {
    pub exponent: f64,
    pub residue: Term,
}

/// The monomials of an explicit term that do not integrate at `b` → `a`
/// over the (d-1)-dimensional wall, grouped by the power of |a - b|, with
/// their residues G(a, a). An error (in words) when a monomial depends on
/// both points other than through a power of their distance, or diverges
/// faster than the subtraction of its leading term can cure.
pub fn singular_terms(
    t: &Term,
    a: &Point,
    b: &Point,
    dim: usize,
) -> Result<Vec<SingularTerm>, String> {
    let summands = expand(t, a, b)?;
    let mut out: Vec<(f64, Vec<Term>)> = Vec::new();
    let joint = |p: &Point, q: &Point| {
        (*p.name == *a.name && *q.name == *b.name) || (*p.name == *b.name && *q.name == *a.name)
    };
    for factors in &summands {
        let mut exponent = 0.0;
        let mut rest = Vec::new();
        for f in factors {
            match f {
                Term::Dist(p, q) if joint(p, q) => exponent += 1.0,
                Term::Pow(base, e) if matches!(&**base, Term::Dist(p, q) if joint(p, q)) => {
                    let Term::Num(n) = &**e else {
                        return Err(format!(
                            "a power of |{} - {}| with an exponent that is not a number",
                            a.name, b.name
                        ));
                    };
                    let Some(x) = num_traits::ToPrimitive::to_f64(n) else {
                        return Err("an exponent too large for a double".into());
                    };
                    exponent += x;
                }
                f if f.mentions_point(a) && f.mentions_point(b) => {
                    return Err(format!(
                        "a factor depends on both `{}` and `{}` other than through a power of their distance, \
                         so the singularity where they meet cannot be separated",
                        a.name, b.name
                    ));
                }
                f => rest.push(f.clone()),
            }
        }
        let k = exponent + (dim as f64 - 1.0);
        if k > 1e-12 {
            continue;
        }
        if k <= -2.0 + 1e-12 {
            return Err(format!(
                "a term of |{} - {}|^({exponent}) diverges faster than the subtraction of its leading \
                 term cures (only |z - z'|^q with q > -(d + 1) are handled)",
                a.name, b.name
            ));
        }
        let map = std::collections::BTreeMap::from([(b.name.clone(), a.clone())]);
        let residue = super::models::substitute_points(&Term::Mul(rest), &map);
        match out.iter_mut().find(|(e, _)| (*e - exponent).abs() < 1e-12) {
            Some((_, rs)) => rs.push(residue),
            None => out.push((exponent, vec![residue])),
        }
    }
    Ok(out
        .into_iter()
        .map(|(exponent, rs)| SingularTerm {
            exponent,
            residue: Term::Add(rs),
        })
        .collect())
}

/// The most products [`expand`] writes out.
const MAX_PRODUCTS: usize = 10_000;

/// The term as a sum of products, sums multiplied out where they depend on
/// both points (the others stay whole factors).
fn expand(t: &Term, a: &Point, b: &Point) -> Result<Vec<Vec<Term>>, String> {
    let both = |f: &Term| f.mentions_point(a) && f.mentions_point(b);
    match t {
        Term::Add(ts) => {
            let mut out = Vec::new();
            for t in ts {
                out.extend(expand(t, a, b)?);
                if out.len() > MAX_PRODUCTS {
                    return Err("the integrand has too many terms to separate".into());
                }
            }
            Ok(out)
        }
        Term::Mul(fs) => {
            let mut out: Vec<Vec<Term>> = vec![Vec::new()];
            for f in fs {
                let parts = if both(f) {
                    expand(f, a, b)?
                } else {
                    vec![vec![f.clone()]]
                };
                if out.len() * parts.len() > MAX_PRODUCTS {
                    return Err("the integrand has too many terms to separate".into());
                }
                out = out
                    .iter()
                    .flat_map(|p| {
                        parts.iter().map(move |q| {
                            let mut r = p.clone();
                            r.extend(q.iter().cloned());
                            r
                        })
                    })
                    .collect();
            }
            Ok(out)
        }
        t => Ok(vec![vec![t.clone()]]),
    }
}

/// The Gaussian subtraction's integral outside ε, split: (finite part,
/// coefficient of ln(1/ε), coefficient of ε^k), per unit residue, for the
/// exponent q in dimension d with width r.
pub fn subtraction_pieces(q: f64, dim: usize, r: f64) -> (f64, f64, f64) {
    let area = super::models::sphere_area(dim - 1);
    let k = q + dim as f64 - 1.0;
    if k.abs() < 1e-12 {
        (area * (r.ln() - 0.5 * EULER_GAMMA), area, 0.0)
    } else {
        let g = super::special::gamma::gamma(0.5 * k).unwrap_or(f64::NAN);
        (area * 0.5 * r.powf(k) * g, 0.0, -area / k)
    }
}

/// One order of the expansion, as reported.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct OrderTerm {
    /// 0, 1 or 2.
    pub order: usize,
    /// The correction at the file's coupling: g^n times the coefficient,
    /// with its quadrature error estimate (finite part at second order).
    pub value: Value,
    /// At second order: the coefficient of ln(1/ε) in the same correction
    /// (an anomalous dimension), when some term of the integrand goes like
    /// |z - z'|^{-(d-1)}; 0 when none does.
    pub log: Option<Value>,
    /// At second order: the power divergences ε^k (k < 0) dropped from
    /// the correction, with their coefficients.
    pub powers: Vec<PowerDivergence>,
    /// Wall-clock seconds this order took.
    pub seconds: f64,
}

/// A power divergence c ε^k of a second-order correction.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PowerDivergence {
    pub exponent: f64,
    pub coefficient: Value,
    /// False when the coefficient's own wall integral did not converge
    /// (in d = 3 it diverges at large distances: ∫ dz ⟨X φ̂²(z)⟩).
    pub converged: bool,
}

/// A value from a quadrature estimate, scaled by `c`.
pub fn scaled(e: &Estimate, extra_error: f64, c: f64) -> Value {
    let magnitude = e.magnitude.max(e.value.abs());
    Value {
        value: c * e.value,
        error: (c * (e.error + extra_error)).abs(),
        nodes: e.nodes,
        scale: (c * magnitude).abs(),
        rounding: 64.0 * f64::EPSILON * (c * magnitude).abs(),
        underflow: false,
        terms: (c * magnitude).abs(),
    }
}

/// Where to centre the plane rule and how wide: below the insertion of X
/// nearest to the wall, its height.
pub fn plane_frame(insertions: &[Vec<f64>]) -> Option<(Vec<f64>, f64)> {
    insertions
        .iter()
        .filter(|p| p.last().is_some_and(|y| *y > 0.0))
        .min_by(|p, q| p.last().unwrap_or(&0.0).total_cmp(q.last().unwrap_or(&0.0)))
        .map(|p| {
            let mut c = p.clone();
            let y = c.last().copied().unwrap_or(1.0);
            if let Some(last) = c.last_mut() {
                *last = 0.0;
            }
            (c, y)
        })
}

/// [`integrate_batch`] with an integrand that may fail: after the first
/// error every value is NaN (which ends the driver) and the error is
/// returned; otherwise the estimate, converged or not.
fn integrate_fallible(
    surface: &Surface,
    mut f: impl FnMut(&[f64], &mut [f64]) -> Result<(), Error>,
    tol: Tolerance,
) -> Result<Estimate, Error> {
    let mut failure = None;
    let e = integrate_batch(
        surface,
        |points, _normals, out| {
            if failure.is_some() {
                out.fill(f64::NAN);
                return;
            }
            if let Err(e) = f(points, out) {
                failure = Some(e);
                out.fill(f64::NAN);
            }
        },
        tol,
    );
    match failure {
        Some(e) => Err(e),
        None => Ok(e),
    }
}

/// ∫ dz f(z) over the wall, f a program with `point` moving, by the plane
/// rule ([`Surface::plane`]).
pub fn plane_integral(
    program: &Program,
    values: &Values,
    point: &str,
    frame: &(Vec<f64>, f64),
    tol: Tolerance,
) -> Result<Estimate, Error> {
    let surface = Surface::plane(&frame.0, frame.1).map_err(quadrature_error)?;
    let batch = program.batch(values, point, None)?;
    converged(integrate_fallible(
        &surface,
        |points, out| batch.eval(points, &[], out),
        tol,
    )?)
}

/// The whole wall R^{d-1} about `centre`, as the disc of radius 2 about it
/// mapped radially by σ ↦ ρ = a (σ/(2 - σ))^m. In ln ρ the map is
/// ln a + m ln(σ/(2 - σ)), so that distances from 10⁻⁶ a to 10⁶ a share
/// the disc without crowding at its rim: a feature whose width is a fixed
/// fraction of its distance costs about the same nodes wherever it lies
/// (the tan map of [`Surface::plane`] crowds large distances into the
/// last nodes). An integrand that falls off like a power ρ^{-p} at
/// infinity becomes (2 - σ)^{m(p - d + 1) - 1} at the rim, and one that
/// behaves like ρ^s at the centre becomes σ^{m(s + d - 1) - d + 1} against
/// the disc's weight σ^{d-2}: whole powers, smooth for the disc's
/// Gauss–Jacobi rule, when p and s are whole numbers (derived).
pub struct Wall {
    centre: Vec<f64>,
    scale: f64,
    power: i32,
    disc: Surface,
}

impl Wall {
    /// The wall about `centre` (on it) with width `scale` and power m ≥ 1.
    pub fn new(centre: &[f64], scale: f64, power: i32) -> Result<Wall, Error> {
        if !(scale > 0.0 && scale.is_finite()) || power < 1 {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!("a wall rule needs a positive width and power, not {scale} and {power}"),
            ));
        }
        let disc = Surface::disc(centre, 2.0).map_err(quadrature_error)?;
        Ok(Wall {
            centre: centre.to_vec(),
            scale,
            power,
            disc,
        })
    }

    /// ∫ d^{d-1}z f(z) over the wall: `f(points, out)` receives points on
    /// the wall (d coordinates each, flat) and writes one value per point.
    pub fn integrate(
        &self,
        mut f: impl FnMut(&[f64], &mut [f64]) -> Result<(), Error>,
        tol: Tolerance,
    ) -> Result<Estimate, Error> {
        let mut mapped = Vec::new();
        let mut jacobian = Vec::new();
        integrate_fallible(
            &self.disc,
            |points, out| {
                self.map(points, &mut mapped, &mut jacobian);
                f(&mapped, out)?;
                for (v, j) in out.iter_mut().zip(&jacobian) {
                    // Far out the Jacobian may overflow where the
                    // integrand has fallen to 0.
                    *v = if *v == 0.0 { 0.0 } else { *v * j };
                }
                Ok(())
            },
            tol,
        )
    }

    /// The disc's nodes moved onto the wall, and per node the Jacobian
    /// (ρ/σ)^{d-2} dρ/dσ, dρ/dσ = 2mρ/(σ(2 - σ)).
    fn map(&self, points: &[f64], mapped: &mut Vec<f64>, jacobian: &mut Vec<f64>) {
        let dim = self.centre.len();
        let m = f64::from(self.power);
        mapped.clear();
        jacobian.clear();
        for p in points.chunks_exact(dim) {
            let sigma = dist2(p, &self.centre).sqrt();
            let rho = self.scale * (sigma / (2.0 - sigma)).powi(self.power);
            let ratio = rho / sigma;
            let drho = 2.0 * m * rho / (sigma * (2.0 - sigma));
            jacobian.push(ratio.powi(dim as i32 - 2) * drho);
            for (x, c) in p.iter().zip(&self.centre) {
                mapped.push(c + (x - c) * ratio);
            }
        }
    }
}

/// |p - q|².
fn dist2(p: &[f64], q: &[f64]) -> f64 {
    p.iter().zip(q).map(|(a, b)| (a - b) * (a - b)).sum()
}

/// The pieces the second-order double integral needs.
pub struct Double<'p> {
    /// The connected correlator, both points free.
    pub full: &'p Program,
    /// Per singular family: its exponent q and the program of G(z, z).
    pub singular: Vec<(f64, &'p Program)>,
    pub first: &'p str,
    pub second: &'p str,
    /// Positions of the insertions of X.
    pub insertions: Vec<Vec<f64>>,
}

/// The result of [`Double::integrate`]: the finite part I of
/// ∫∫ dz dz' ⟨X O O⟩_c, and the coefficients of its divergences.
#[derive(Clone, Debug)]
pub struct DoubleResult {
    pub finite: Estimate,
    /// A bound on what the inner integrals' errors add to `finite`.
    pub inner_error: f64,
    /// Total integrand evaluations, inner ones included.
    pub evaluations: usize,
    pub log: Option<Estimate>,
    pub powers: Vec<(f64, Estimate)>,
}

/// One inner integral: the finite part at one z, its error estimate, the
/// evaluations it took and Σ|w f| of its pieces.
#[derive(Clone, Copy, Debug)]
pub struct Inner {
    pub value: f64,
    pub error: f64,
    pub nodes: usize,
    pub magnitude: f64,
}

impl Double<'_> {
    /// The outer integral over z of the inner finite part over z' by a
    /// [`Wall`] rule; `tol` is the relative accuracy asked of the outer
    /// one. The inner ones are asked for an absolute accuracy
    /// τ M s(z), τ = `tol`/20, M = |F| below the lowest insertion (F the
    /// outer integrand), s(z) = (1 + |z - c|²/y²)^{-(d - 1/2)/2} about that
    /// point c at height y: s falls off more slowly than F (like
    /// |z|^{2-2d} here) yet is integrable, with
    /// ∫ s = y^{d-1} π^{(d-1)/2} Γ(1/4)/Γ((d - 1/2)/2) (common practice), so
    /// the inner errors add at most τ M ∫ s to the outer integral, which is
    /// added to its error estimate. An inner integral that does not reach
    /// its accuracy is an error.
    pub fn integrate(&self, values: &Values, tol: f64, floor: f64) -> Result<DoubleResult, Error> {
        let dim = values.dim;
        let frame = plane_frame(&self.insertions).ok_or_else(|| {
            Error::new(
                ErrorKind::Placement,
                "the correlator needs a bulk insertion with a position",
            )
        })?;
        let (centre, height) = (&frame.0, frame.1);
        let outer = Wall::new(centre, height, OUTER_POWER)?;
        let inner_tol = INNER_SHARE * tol;
        let mut local = values.clone();
        // The scale M: the outer integrand below the lowest insertion, to
        // a relative accuracy (or, should it vanish there, a thousandth of
        // its pieces' size).
        let at_centre = self.inner(centre, &mut local, 0.0, inner_tol)?;
        let scale = at_centre
            .value
            .abs()
            .max(1e-3 * at_centre.magnitude / height.powi(dim as i32 - 1));
        let n = (dim - 1) as f64;
        let spread =
            |z: &[f64]| (1.0 + dist2(z, centre) / (height * height)).powf(-0.5 * (n + 0.5));
        let gamma = |x: f64| super::special::gamma::gamma(x).unwrap_or(f64::NAN);
        let spread_integral =
            height.powf(n) * PI.powf(0.5 * n) * gamma(0.25) / gamma(0.5 * (n + 0.5));
        let mut evaluations = at_centre.nodes;
        let finite = outer.integrate(
            |points, out| {
                for (z, v) in points.chunks_exact(dim).zip(out.iter_mut()) {
                    let r = self.inner(z, &mut local, inner_tol * scale * spread(z), 0.0)?;
                    evaluations += r.nodes;
                    *v = r.value;
                }
                Ok(())
            },
            Tolerance::relative(tol)
                .with_abs(floor)
                .with_max_nodes(OUTER_BUDGET),
        )?;
        let finite = converged(finite)?;
        evaluations += finite.nodes;
        let inner_error = inner_tol * scale * spread_integral;
        // The divergences: S_{d-1} ∫ dz G(z, z) times -1/k, or for k = 0 the
        // coefficient of ln(1/ε).
        let mut log = None;
        let mut powers = Vec::new();
        for (q, g) in &self.singular {
            let (_, log_c, power_c) = subtraction_pieces(*q, dim, 1.0);
            // Not required to converge: in d = 3 the coefficient of the
            // boundary-mass divergence is itself an integral that diverges
            // at large |z| (reported as such).
            let mut e = match plane_integral(
                g,
                values,
                self.first,
                &frame,
                Tolerance::relative(tol)
                    .with_abs(floor)
                    .with_max_nodes(400_000),
            ) {
                Ok(e) => e,
                Err(e) if e.kind == ErrorKind::Numeric => Estimate {
                    value: f64::NAN,
                    error: f64::INFINITY,
                    nodes: 0,
                    magnitude: f64::NAN,
                    converged: false,
                },
                Err(e) => return Err(e),
            };
            evaluations += e.nodes;
            if log_c != 0.0 {
                e.value *= log_c;
                e.error *= log_c.abs();
                e.magnitude *= log_c.abs();
                log = Some(e);
            } else {
                e.value *= power_c;
                e.error *= power_c.abs();
                e.magnitude *= power_c.abs();
                powers.push((*q + dim as f64 - 1.0, e));
            }
        }
        Ok(DoubleResult {
            finite,
            inner_error,
            evaluations,
            log,
            powers,
        })
    }

    /// The finite part of ∫ dz' ⟨X O(z) O(z')⟩_c at one z, to the absolute
    /// accuracy `abs` or, when `abs` is 0, the relative accuracy `rel`.
    /// The integrand F is split by the partition of unity 1 = w + (1 - w),
    /// w = 1/(1 + S), S = Σ_i (|z' - z|/|z' - x_i|)^{2M} over the
    /// insertions x_i of X: w is 1 at z to order |u|^{2M} (u = z' - z) and
    /// falls like (distance of x_i from the wall/|z - x_i|)^{2M} at the
    /// foot of x_i, so that the near part does not hold the peaks under
    /// the insertions however far z is from them (the earlier partition
    /// (1 - e^{-|u|²/a²})^M left 14% of them in it, at an angular width
    /// that shrinks with the distance). The near part wF, with the
    /// subtraction, by the plane rule about z with width a = half the
    /// distance to the nearest insertion (symmetrised in u → -u; the tan
    /// map keeps its nodes at |u| ≳ 10⁻⁴a, where the rounding of the
    /// subtracted difference, ε G |u|^q, stays small); the far part
    /// (1 - w)F, which vanishes like |u|^{2M} at z, by the plane rule under
    /// the insertions.
    pub fn inner(&self, z: &[f64], local: &mut Values, abs: f64, rel: f64) -> Result<Inner, Error> {
        let dim = local.dim;
        local.points.insert(self.first.to_string(), z.to_vec());
        let r = self
            .insertions
            .iter()
            .map(|p| dist2(p, z).sqrt())
            .fold(f64::INFINITY, f64::min);
        if !(r.is_finite() && r > 0.0) {
            return Err(Error::new(
                ErrorKind::Placement,
                "an insertion of the correlator lies on the wall",
            ));
        }
        let a = 0.5 * r;
        let mut residues = Vec::with_capacity(self.singular.len());
        let mut analytic = 0.0;
        for (q, g) in &self.singular {
            let g0 = g.eval(local)?;
            let (fin, _, _) = subtraction_pieces(*q, dim, a);
            analytic += g0 * fin;
            residues.push((*q, g0));
        }
        let batch = self.full.batch(local, self.second, None)?;
        let tolerance = Tolerance::relative(0.5 * rel)
            .with_abs(0.5 * abs)
            .with_max_nodes(INNER_BUDGET);
        let partition = |p: &[f64]| -> f64 {
            let u2 = dist2(p, z);
            self.insertions
                .iter()
                .map(|x| (u2 / dist2(p, x)).powi(PARTITION_POWER))
                .sum()
        };
        // The near part.
        let mut mirrored = Vec::new();
        let mut out2 = Vec::new();
        let surface = Surface::plane(z, a).map_err(quadrature_error)?;
        let near = integrate_fallible(
            &surface,
            |points, out| {
                mirrored.clear();
                for p in points.chunks_exact(dim) {
                    for (x, c) in p.iter().zip(z) {
                        mirrored.push(2.0 * c - x);
                    }
                }
                out2.clear();
                out2.resize(out.len(), 0.0);
                batch.eval(points, &[], out)?;
                batch.eval(&mirrored, &[], &mut out2)?;
                // Each half minus the subtraction at its own distance, as
                // the program computes it from the stored coordinates (the
                // difference of two close doubles is exact), so that the
                // singular parts cancel to rounding of the smooth factor.
                let half = |p: &[f64], f: f64| -> f64 {
                    let u2 = dist2(p, z);
                    let gauss = (-u2 / (a * a)).exp();
                    let sub: f64 = residues
                        .iter()
                        .map(|(q, g0)| g0 * u2.powf(0.5 * q) * gauss)
                        .sum();
                    f / (1.0 + partition(p)) - sub
                };
                for (((p, m), v), w) in points
                    .chunks_exact(dim)
                    .zip(mirrored.chunks_exact(dim))
                    .zip(out.iter_mut())
                    .zip(out2.iter())
                {
                    *v = 0.5 * (half(p, *v) + half(m, *w));
                }
                Ok(())
            },
            tolerance,
        )?;
        let near = converged(near)?;
        // The far part.
        let (centre, scale) = plane_frame(&self.insertions).unwrap_or((z.to_vec(), r));
        // A width incommensurate with the outer rule's, so that no node of
        // this rule falls on z, a node of the outer one.
        let far_f = |points: &[f64], out: &mut [f64]| -> Result<(), Error> {
            batch.eval(points, &[], out)?;
            for (p, v) in points.chunks_exact(dim).zip(out.iter_mut()) {
                let s = partition(p);
                // At z itself the factor is 0 and F has no value.
                *v = if s == 0.0 { 0.0 } else { s / (1.0 + s) * *v };
            }
            Ok(())
        };
        let far = integrate_fallible(
            &Surface::plane(&centre, scale * (1.0 + 1.0 / PI)).map_err(quadrature_error)?,
            far_f,
            tolerance,
        )?;
        let far = converged(far)?;
        Ok(Inner {
            value: near.value + far.value + analytic,
            error: near.error + far.error,
            nodes: 2 * near.nodes + far.nodes,
            magnitude: near.magnitude + far.magnitude,
        })
    }
}

/// The power M of the partition: the far part vanishes like |u|^{2M} at z,
/// so that F times it is smooth enough there for the rule under the
/// insertions (|u|^{2M-d-1} at worst).
const PARTITION_POWER: i32 = 8;
/// The [`Wall`] power of the outer rule (its integrand is smooth and falls
/// off like a power).
const OUTER_POWER: i32 = 1;
/// The share of the outer tolerance the inner integrals are asked for.
const INNER_SHARE: f64 = 0.05;
/// The most outer nodes of the double integral (each an inner integral).
const OUTER_BUDGET: usize = 200_000;
/// The most evaluations of one part of an inner integral.
const INNER_BUDGET: usize = 400_000;

/// The estimate, or an error when the driver did not converge.
fn converged(e: Estimate) -> Result<Estimate, Error> {
    if e.converged {
        Ok(e)
    } else {
        Err(Error::new(
            ErrorKind::Numeric,
            format!(
                "quadrature over the wall did not converge: {} ± {:.1e} after {} evaluations",
                e.value, e.error, e.nodes
            ),
        )
        .with_note("loosen `tolerance`, or move the insertions away from the wall"))
    }
}

fn quadrature_error(e: super::quadrature::QuadratureError) -> Error {
    Error::new(ErrorKind::Numeric, e.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The Gaussian subtraction's pieces against a direct radial integral
    /// outside ε (derived): ∫_ε^∞ r^{k-1} e^{-r²/R²} dr S_{d-1}.
    #[test]
    fn subtraction_pieces_match_the_radial_integral() {
        for (q, dim) in [(-3.0, 3usize), (-4.0, 4), (-2.0, 3), (-3.0, 4), (-2.5, 3)] {
            let r: f64 = 0.7;
            let eps: f64 = 1e-4;
            let k = q + dim as f64 - 1.0;
            // ∫_ε^∞ r^{k-1} e^{-r²/R²} dr by the substitution r = ε e^t.
            let n = 200_000;
            let t_max = ((10.0 * r) / eps).ln();
            let h = t_max / n as f64;
            let mut sum = 0.0;
            for i in 0..=n {
                let t = i as f64 * h;
                let x = eps * t.exp();
                let w = if i == 0 || i == n { 0.5 } else { 1.0 };
                sum += w * x.powf(k) * (-(x * x) / (r * r)).exp();
            }
            let direct = sum * h * crate::numeric::models::sphere_area(dim - 1);
            let (fin, log, power) = subtraction_pieces(q, dim, r);
            let predicted = fin + log * (1.0 / eps).ln() + power * eps.powf(k);
            // The dropped terms are O(ε^{k+2}).
            assert!(
                (direct - predicted).abs() < 1e-6 * direct.abs().max(1.0),
                "q = {q}, d = {dim}: {direct} against {predicted}"
            );
        }
    }

    #[test]
    fn gamma_half_integer() {
        // Γ(-1/2) = -2√π (common practice).
        let g = crate::numeric::special::gamma::gamma(-0.5).unwrap();
        assert!((g + 2.0 * PI.sqrt()).abs() < 1e-13);
    }
}
