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
//! angular rules are symmetric under u → -u) and the even ones being integrable
//! for -2 < k. The finite part is computed as
//!
//! ```text
//! ∫ du [F(z, z+u) - Σ G(z, z) |u|^q] χ(|u|) + ∫ du (1 - χ(|u|)) F(z, z+u)
//!     + Σ S_{d-1} G(z, z) · (L^k Γ(k/m)/m  or  ln L - γ/m),
//! ```
//!
//! χ(r) = e^{-(r/L)^m} of any width L (here 0.6 times the distance from z
//! to the nearest insertion of X; m = 5 or 6), the first integral by a
//! radial rule about z whose angular rules cancel the odd terms in u, the
//! second line being the cutoff's own integral outside ε with its
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

/// The cut-off subtraction's integral outside ε, split: (finite part,
/// coefficient of ln(1/ε), coefficient of ε^k), per unit residue, for the
/// exponent q in dimension d with the cutoff e^{-(r/L)^m} of width L:
///
/// ```text
/// S_{d-1} ∫_ε^∞ r^{k-1} e^{-(r/L)^m} dr
///     = S_{d-1} (L^k Γ(k/m)/m - ε^k/k)      + O(ε^{k+m})   (k ≠ 0),
///     = S_{d-1} (ln L - γ/m + ln(1/ε))      + O(ε^m)       (k = 0),
/// ```
///
/// by t = (r/L)^m and the expansion of the incomplete Γ(k/m, (ε/L)^m) at
/// small argument (derived; m = 2 is the Gaussian of the earlier rule).
pub fn subtraction_pieces(q: f64, dim: usize, width: f64, m: f64) -> (f64, f64, f64) {
    let area = super::models::sphere_area(dim - 1);
    let k = q + dim as f64 - 1.0;
    if k.abs() < 1e-12 {
        (area * (width.ln() - EULER_GAMMA / m), area, 0.0)
    } else {
        let g = super::special::gamma::gamma(k / m).unwrap_or(f64::NAN);
        (area * width.powf(k) * g / m, 0.0, -area / k)
    }
}

/// A rule on the unit sphere S^{n-1} of the wall R^n at `level` ℓ:
/// directions (n coordinates each, flat) and weights summing to its area.
/// The circle (n = 2) is the trapezoid rule with 2ℓ points, spectrally
/// accurate for smooth periodic integrands; above it, t = cos θ₁ by
/// Gauss–Jacobi with α = β = (n - 3)/2 (ℓ points) times S^{n-2} at the same
/// level, the hyperspherical product rule (common practice). Every rule
/// is symmetric under ω → -ω (the Gauss nodes are symmetric, the circle's
/// count even), so the odd terms of an integrand in ω cancel in it.
fn sphere_rule(n: usize, level: usize) -> (Vec<f64>, Vec<f64>) {
    match n {
        0 => (Vec::new(), Vec::new()),
        1 => (vec![1.0, -1.0], vec![1.0, 1.0]),
        2 => {
            let count = 2 * level;
            let h = 2.0 * PI / count as f64;
            let mut dirs = Vec::with_capacity(2 * count);
            for j in 0..count {
                // Offset by a quarter step from the axes, so that no node
                // lies along a coordinate direction of the wall.
                let (s, c) = ((j as f64 + 0.25) * h).sin_cos();
                dirs.extend([c, s]);
            }
            (dirs, vec![h; count])
        }
        _ => {
            let a = 0.5 * (n as f64 - 3.0);
            let rule = super::quadrature::gauss_jacobi(level, a, a);
            let (sub, subw) = sphere_rule(n - 1, level);
            let mut dirs = Vec::with_capacity(rule.len() * sub.len() / (n - 1) * n);
            let mut weights = Vec::with_capacity(rule.len() * subw.len());
            for (&t, &w) in rule.nodes.iter().zip(&rule.weights) {
                let across = ((1.0 - t) * (1.0 + t)).sqrt();
                for (d, &v) in sub.chunks_exact(n - 1).zip(&subw) {
                    dirs.extend(d.iter().map(|x| across * x));
                    dirs.push(t);
                    weights.push(w * v);
                }
            }
            (dirs, weights)
        }
    }
}

/// Sphere rules at successive levels: (directions, weights) each.
type Rules = Vec<(Vec<f64>, Vec<f64>)>;

/// The sphere rules at the levels of [`angular_levels`], built once per
/// dimension of the wall.
fn sphere_rules(n: usize) -> std::sync::Arc<Rules> {
    use std::sync::{Arc, Mutex, OnceLock};
    static RULES: OnceLock<Mutex<Vec<Option<Arc<Rules>>>>> = OnceLock::new();
    let cache = RULES.get_or_init(|| Mutex::new(Vec::new()));
    let mut cache = match cache.lock() {
        Ok(c) => c,
        Err(poisoned) => poisoned.into_inner(),
    };
    if cache.len() <= n {
        cache.resize(n + 1, None);
    }
    if let Some(r) = &cache[n] {
        return Arc::clone(r);
    }
    let rules: Vec<_> = angular_levels(n)
        .iter()
        .map(|&l| sphere_rule(n, l))
        .collect();
    let rules = Arc::new(rules);
    cache[n] = Some(Arc::clone(&rules));
    rules
}

/// The levels of the angular rule on S^{n-1}, doubling from 4, up to about
/// [`ANGULAR_MAX_NODES`] directions.
fn angular_levels(n: usize) -> Vec<usize> {
    let mut out = vec![4usize];
    loop {
        let next = 2 * out[out.len() - 1];
        let count = if n <= 1 {
            2
        } else {
            2 * next.pow(n as u32 - 1)
        };
        if count > ANGULAR_MAX_NODES || n <= 1 {
            return out;
        }
        out.push(next);
    }
}

/// The most directions of one angular rule.
const ANGULAR_MAX_NODES: usize = 40_000;

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
            let (_, log_c, power_c) = subtraction_pieces(*q, dim, 1.0, 2.0);
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
    /// The integrand F is split by the partition of unity 1 = χ + (1 - χ),
    /// χ = e^{-(|u|/L)^m} a function of the distance |u| = |z' - z| alone,
    /// L = [`NEAR_WIDTH`] times the distance from z to the nearest
    /// insertion of X, m = [`CUTOFF_POWER`] (or one less, so that m + q is
    /// even for an odd exponent q: then (1 - χ)F, which vanishes like
    /// |u|^{m+q} at z, is smooth there). The near part χF, with the
    /// subtraction Σ G(z, z)|u|^q χ, by the radial rule about z
    /// ([`near_part`]); the far part (1 - χ)F by a [`Wall`] rule under
    /// the insertions, which holds their peaks.
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
        let width = NEAR_WIDTH * r;
        let m = self.cutoff_power();
        let mut residues = Vec::with_capacity(self.singular.len());
        let mut analytic = 0.0;
        for (q, g) in &self.singular {
            let g0 = g.eval(local)?;
            let (fin, _, _) = subtraction_pieces(*q, dim, width, m);
            analytic += g0 * fin;
            residues.push((*q, g0));
        }
        let batch = self.full.batch(local, self.second, None)?;
        let near = near_part(
            z,
            |points, out| batch.eval(points, &[], out),
            &residues,
            (width, m),
            0.5 * abs,
            0.5 * rel,
        )?;
        // The far part.
        let (centre, scale) = plane_frame(&self.insertions).unwrap_or((z.to_vec(), r));
        // A width incommensurate with the outer rule's, so that no node of
        // this rule falls on z, a node of the outer one.
        let far_f = |points: &[f64], out: &mut [f64]| -> Result<(), Error> {
            batch.eval(points, &[], out)?;
            for (p, v) in points.chunks_exact(dim).zip(out.iter_mut()) {
                let s = (dist2(p, z).sqrt() / width).powf(m);
                // At z itself the factor is 0 and F has no value.
                *v = if s == 0.0 { 0.0 } else { -(-s).exp_m1() * *v };
            }
            Ok(())
        };
        let tolerance = Tolerance::relative(0.5 * rel)
            .with_abs(0.5 * abs)
            .with_max_nodes(INNER_BUDGET);
        let far =
            Wall::new(&centre, scale * (1.0 + 1.0 / PI), FAR_POWER)?.integrate(far_f, tolerance)?;
        let far = converged(far)?;
        Ok(Inner {
            value: near.value + far.value + analytic,
            error: near.error + far.error,
            nodes: near.nodes + far.nodes,
            magnitude: near.magnitude + far.magnitude,
        })
    }

    /// The power m of the cutoff e^{-(|u|/L)^m}: [`CUTOFF_POWER`], plus one
    /// when the most singular exponent q is an odd whole number.
    fn cutoff_power(&self) -> f64 {
        let q = self
            .singular
            .iter()
            .map(|(q, _)| *q)
            .fold(f64::INFINITY, f64::min);
        let odd = q.is_finite() && q.fract() == 0.0 && q.rem_euclid(2.0) == 1.0;
        CUTOFF_POWER - if odd { 1.0 } else { 0.0 }
    }
}

/// The near part of the inner integral,
///
/// ```text
/// ∫_0^R dr r^{n-1} χ(r) [∮ dω F(z + r ω) - S_n Σ G(z, z) r^q],
/// ```
///
/// n = d - 1, χ = e^{-(r/L)^m}, R = L·42^{1/m} (χ(R) = e^{-42}, below
/// the rounding of any value). The odd terms of F in ω cancel in the
/// angular rule ([`sphere_rule`]), so that after the subtraction the
/// bracket is r^{q+2} times a function of r² when G is smooth, and the
/// radial integrand r^{n-1+q+2}(…) is smooth for q + d whole (in the
/// radius itself, by Gauss–Legendre on panels; half-whole q + d in
/// r = R t², which makes it smooth too). The radial integral is
/// adaptive by bisection: each panel's 8-point rule against the sum of
/// its halves', the difference its error (an overestimate of the
/// halves' error for smooth integrands). At each radial node the
/// angular rule doubles its level until two levels agree to the node's
/// share of the tolerance (or to the rounding of F's pieces there), and
/// that difference is added to the error.
///
/// `f(points, out)` evaluates F at points of the wall (d coordinates
/// each, flat); `residues` holds each subtracted family's (q, G(z, z));
/// `cutoff` is (L, m).
pub fn near_part(
    z: &[f64],
    mut f: impl FnMut(&[f64], &mut [f64]) -> Result<(), Error>,
    residues: &[(f64, f64)],
    cutoff: (f64, f64),
    abs: f64,
    rel: f64,
) -> Result<Estimate, Error> {
    let (width, m) = cutoff;
    let dim = z.len();
    let n = dim - 1;
    let rules = sphere_rules(n);
    let radius = width * NEGLIGIBLE.powf(1.0 / m);
    // r = R t^p: p = 1 when every q + d is whole, 2 otherwise.
    let whole = residues
        .iter()
        .all(|(q, _)| (q + dim as f64).fract() == 0.0);
    let p = if whole { 1 } else { 2 };
    let gauss = super::quadrature::gauss_legendre(RADIAL_NODES);
    let nodes = std::cell::Cell::new(0usize);
    let mut points = Vec::new();
    let mut values = Vec::new();
    /// A radial node's or panel's sum: value, the angular rules' last
    /// change, the rounding floor, Σ|w f|.
    #[derive(Clone, Copy, Default)]
    struct Node {
        value: f64,
        change: f64,
        floor: f64,
        size: f64,
    }
    // One panel [t0, t1].
    let mut panel = |t0: f64, t1: f64, target: f64| -> Result<Node, Error> {
        let half = 0.5 * (t1 - t0);
        let mut sum = Node::default();
        for (&x, &w) in gauss.nodes.iter().zip(&gauss.weights) {
            let t = t0 + half * (1.0 + x);
            let (r, dr) = if p == 1 {
                (radius * t, radius)
            } else {
                (radius * t * t, 2.0 * radius * t)
            };
            let s = (r / width).powf(m);
            let jac = dr * r.powi(n as i32 - 1) * (-s).exp();
            let mut previous: Option<f64> = None;
            let mut node = Node::default();
            for (dirs, weights) in rules.iter() {
                points.clear();
                for d in dirs.chunks_exact(n) {
                    points.extend(z[..n].iter().zip(d).map(|(c, e)| c + r * e));
                    points.push(0.0);
                }
                values.clear();
                values.resize(weights.len(), 0.0);
                f(&points, &mut values)?;
                nodes.set(nodes.get() + weights.len());
                let mut total = 0.0;
                let mut size = 0.0;
                for ((v, w), p) in values.iter().zip(weights).zip(points.chunks_exact(dim)) {
                    // The subtraction at the stored point's own distance, as
                    // F has it (the stored point is z + rω rounded), so
                    // that the singular terms cancel to the rounding of the
                    // values.
                    let u = dist2(p, z).sqrt();
                    let sub: f64 = residues.iter().map(|(q, g0)| g0 * u.powf(*q)).sum();
                    total += w * (v - sub);
                    size += w * (v.abs() + sub.abs());
                }
                let value = jac * total;
                let floor = ROUNDING * f64::EPSILON * jac * size;
                if rules.len() == 1 {
                    // S^0 (d = 2): two points, exact.
                    node = Node {
                        value,
                        change: 0.0,
                        floor,
                        size: jac * size,
                    };
                    break;
                }
                let change = previous.map_or(f64::INFINITY, |v: f64| (value - v).abs());
                node = Node {
                    value,
                    change: if change <= floor { 0.0 } else { change },
                    floor,
                    size: jac * size,
                };
                // Its share: the radial weights sum to 1.
                let share = ANGULAR_SHARE * target.max(rel * value.abs());
                if change <= share.max(floor) {
                    break;
                }
                previous = Some(value);
            }
            let c = half * w;
            sum.value += c * node.value;
            sum.change += c * node.change;
            sum.floor += c * node.floor;
            sum.size += c * node.size;
        }
        Ok(sum)
    };
    struct Piece {
        t0: f64,
        t1: f64,
        whole: Node,
        left: Node,
        right: Node,
    }
    impl Piece {
        fn value(&self) -> f64 {
            self.left.value + self.right.value
        }
        /// The truncation error: the rule against its halves', and the
        /// angular rules' last changes.
        fn error(&self) -> f64 {
            (self.whole.value - self.left.value - self.right.value).abs()
                + self.left.change
                + self.right.change
        }
        fn floor(&self) -> f64 {
            self.left.floor + self.right.floor
        }
    }
    let mut target = abs;
    let mut pieces = Vec::new();
    for k in 0..RADIAL_START {
        let t0 = k as f64 / RADIAL_START as f64;
        let t1 = (k + 1) as f64 / RADIAL_START as f64;
        let tm = 0.5 * (t0 + t1);
        pieces.push(Piece {
            t0,
            t1,
            whole: panel(t0, t1, target)?,
            left: panel(t0, tm, target)?,
            right: panel(tm, t1, target)?,
        });
    }
    loop {
        let value: f64 = pieces.iter().map(Piece::value).sum();
        let error: f64 = pieces.iter().map(Piece::error).sum();
        let floor: f64 = pieces.iter().map(Piece::floor).sum();
        let magnitude: f64 = pieces.iter().map(|p| p.left.size + p.right.size).sum();
        let goal = abs.max(rel * value.abs());
        target = goal;
        let done = error + floor <= goal;
        let nodes = nodes.get();
        // Below the rounding floor bisection cannot help (near r = 0 it
        // raises the floor).
        if done || floor > goal || nodes > INNER_BUDGET || !error.is_finite() {
            return converged(Estimate {
                value,
                error: error + floor,
                nodes,
                magnitude,
                converged: done,
            });
        }
        // Bisect the panel with the largest error.
        let worst = pieces
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.error().total_cmp(&b.1.error()))
            .map_or(0, |(i, _)| i);
        let old = pieces.swap_remove(worst);
        let tm = 0.5 * (old.t0 + old.t1);
        for (t0, t1, whole) in [(old.t0, tm, old.left), (tm, old.t1, old.right)] {
            let mid = 0.5 * (t0 + t1);
            pieces.push(Piece {
                t0,
                t1,
                whole,
                left: panel(t0, mid, target)?,
                right: panel(mid, t1, target)?,
            });
        }
    }
}

/// The [`Wall`] power of the far part's rule.
const FAR_POWER: i32 = 1;
/// The width L of the near part's cutoff, as a fraction of the distance
/// from z to the nearest insertion.
const NEAR_WIDTH: f64 = 0.6;
/// The power m of the cutoff e^{-(|u|/L)^m} (one less for odd q).
const CUTOFF_POWER: f64 = 6.0;
/// e^{-42}: where the cutoff ends the near part.
const NEGLIGIBLE: f64 = 42.0;
/// Gauss–Legendre nodes per radial panel.
const RADIAL_NODES: usize = 8;
/// Radial panels to start from.
const RADIAL_START: usize = 2;
/// The share of the tolerance each radial node's angular rule may leave.
const ANGULAR_SHARE: f64 = 0.2;
/// The rounding of a subtracted angular sum, in units of ε times its
/// pieces' size.
const ROUNDING: f64 = 8.0;
/// The [`Wall`] power of the outer rule (its integrand is smooth and falls
/// off like a power).
const OUTER_POWER: i32 = 1;
/// The share of the outer tolerance the inner integrals are asked for.
const INNER_SHARE: f64 = 0.05;
/// The most outer nodes of the double integral (each an inner integral).
const OUTER_BUDGET: usize = 200_000;
/// The most evaluations of one part of an inner integral (in d = 4 far
/// from the insertions the far part needs more than 400 000 at 1e-4).
const INNER_BUDGET: usize = 4_000_000;

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

    /// The cut-off subtraction's pieces against a direct radial integral
    /// outside ε (derived): S_{d-1} ∫_ε^∞ r^{k-1} e^{-(r/L)^m} dr, for the
    /// Gaussian (m = 2) and other cutoffs (m = 8, 9).
    #[test]
    fn subtraction_pieces_match_the_radial_integral() {
        for m in [2.0, 8.0, 9.0] {
            for (q, dim) in [(-3.0, 3usize), (-4.0, 4), (-2.0, 3), (-3.0, 4), (-2.5, 3)] {
                let r: f64 = 0.7;
                let eps: f64 = 1e-4;
                let k = q + dim as f64 - 1.0;
                // ∫_ε^∞ r^{k-1} e^{-(r/L)^m} dr by the substitution r = ε e^t.
                let n = 200_000;
                let t_max = ((10.0 * r) / eps).ln();
                let h = t_max / n as f64;
                let mut sum = 0.0;
                for i in 0..=n {
                    let t = i as f64 * h;
                    let x = eps * t.exp();
                    let w = if i == 0 || i == n { 0.5 } else { 1.0 };
                    sum += w * x.powf(k) * (-(x / r).powf(m)).exp();
                }
                let direct = sum * h * crate::numeric::models::sphere_area(dim - 1);
                let (fin, log, power) = subtraction_pieces(q, dim, r, m);
                let predicted = fin + log * (1.0 / eps).ln() + power * eps.powf(k);
                // The dropped terms are O(ε^{k+m}).
                assert!(
                    (direct - predicted).abs() < 1e-6 * direct.abs().max(1.0),
                    "m = {m}, q = {q}, d = {dim}: {direct} against {predicted}"
                );
            }
        }
    }

    /// The sphere rules against the moments of the unit sphere S^{n-1}
    /// (common practice): ∮ 1 = S_n, ∮ ω_i² = S_n/n, ∮ ω_i⁴ =
    /// 3 S_n/(n(n + 2)), ∮ ω_1² ω_2² = S_n/(n(n + 2)), odd moments 0; and
    /// each rule is symmetric under ω → -ω.
    #[test]
    fn sphere_rules_integrate_the_moments() {
        for n in 2..=6usize {
            let area = crate::numeric::models::sphere_area(n);
            for level in [4usize, 8] {
                let (dirs, weights) = sphere_rule(n, level);
                let moment = |f: &dyn Fn(&[f64]) -> f64| -> f64 {
                    dirs.chunks_exact(n)
                        .zip(&weights)
                        .map(|(d, w)| w * f(d))
                        .sum()
                };
                let nn = n as f64;
                let cases: [(f64, f64); 6] = [
                    (moment(&|_| 1.0), area),
                    (moment(&|d| d[0] * d[0]), area / nn),
                    (
                        moment(&|d| d[n - 1].powi(4)),
                        3.0 * area / (nn * (nn + 2.0)),
                    ),
                    (
                        moment(&|d| d[0] * d[0] * d[1] * d[1]),
                        area / (nn * (nn + 2.0)),
                    ),
                    (moment(&|d| d[0] * d[1] * d[1]), 0.0),
                    (moment(&|d| d.iter().map(|x| x * x).sum::<f64>()), area),
                ];
                for (k, (got, want)) in cases.iter().enumerate() {
                    assert!(
                        (got - want).abs() < 1e-13 * area,
                        "n = {n}, level {level}, moment {k}: {got} against {want}"
                    );
                }
                // Symmetric: the negated directions are directions.
                for d in dirs.chunks_exact(n) {
                    assert!(dirs
                        .chunks_exact(n)
                        .any(|e| e.iter().zip(d).all(|(a, b)| (a + b).abs() < 1e-14)));
                }
            }
        }
    }

    /// The radial rule of the near part on a closed form (derived): with
    /// F(z + u) = |u|^q (1 + b u_1 + c |u|²) and the residue G(z, z) = 1,
    ///
    /// ```text
    /// ∫ d^n u χ(|u|) (F - |u|^q) = c S_n ∫_0^∞ r^{k+1} e^{-(r/L)^m} dr
    ///                            = c S_n L^{k+2} Γ((k + 2)/m)/m,
    /// ```
    ///
    /// k = q + n, the odd term b u_1 cancelling in the symmetric angular
    /// rule. The estimate covers the actual error at each tolerance.
    #[test]
    fn near_part_integrates_a_closed_form() {
        for (dim, q) in [(3usize, -3.0), (4, -4.0), (3, -2.5), (5, -5.0), (4, -3.0)] {
            let n = dim - 1;
            let m = if q == -3.0 || q == -5.0 { 5.0 } else { 6.0 };
            let (b, c, width): (f64, f64, f64) = (0.7, -1.3, 0.45);
            let z: Vec<f64> = (0..dim)
                .map(|i| {
                    if i + 1 == dim {
                        0.0
                    } else {
                        0.1 * i as f64 - 0.2
                    }
                })
                .collect();
            let k = q + n as f64;
            let gamma = crate::numeric::special::gamma::gamma((k + 2.0) / m).unwrap();
            let exact =
                c * crate::numeric::models::sphere_area(n) * width.powf(k + 2.0) * gamma / m;
            for tol in [1e-4, 1e-7, 1e-9] {
                let f = |points: &[f64], out: &mut [f64]| -> Result<(), Error> {
                    for (p, v) in points.chunks_exact(dim).zip(out.iter_mut()) {
                        let u: Vec<f64> = p.iter().zip(&z).map(|(a, b)| a - b).collect();
                        let r2: f64 = u.iter().map(|x| x * x).sum();
                        *v = r2.powf(0.5 * q) * (1.0 + b * u[0] + c * r2);
                    }
                    Ok(())
                };
                let e = near_part(&z, f, &[(q, 1.0)], (width, m), tol * exact.abs(), 0.0)
                    .unwrap_or_else(|e| panic!("d = {dim}, q = {q}, tol {tol}: {}", e.message));
                let actual = (e.value - exact).abs();
                assert!(
                    actual <= e.error && e.error <= tol * exact.abs(),
                    "d = {dim}, q = {q}, tol {tol}: {} ± {:.1e} against {exact} (off by {actual:.1e}, {} nodes)",
                    e.value,
                    e.error,
                    e.nodes
                );
            }
        }
    }

    #[test]
    fn gamma_half_integer() {
        // Γ(-1/2) = -2√π (common practice).
        let g = crate::numeric::special::gamma::gamma(-0.5).unwrap();
        assert!((g + 2.0 * PI.sqrt()).abs() < 1e-13);
    }
}
