//! Block expansions of a bulk two-point function next to a flat wall.
//!
//! With G(ξ) defined by ⟨O(x1) O(x2)⟩ = G(ξ)/((2y1)^Δ (2y2)^Δ ξ^Δ) (the
//! normalisation of [`super::special::blocks`]), the two channels are
//!
//!   bulk:     G(ξ) = c_1 + Σ_k c_k f_bulk(Δ_k; ξ)   (c_1: the identity),
//!   boundary: G(ξ) = ξ^Δ Σ_l c_l f_bdy(Δ̂_l; ξ).
//!
//! [`fit`] takes G as a function and the exchanged dimensions, solves for
//! the coefficients by least squares at sample values of ξ (Householder QR
//! on columns scaled to unit length), and measures the largest difference
//! between G and the fitted sum at other values of ξ, relative to the
//! largest |G| there. A finite expansion that is exact fits to rounding; a
//! tower is fitted where its channel converges fastest (large ξ for the
//! boundary channel, small ξ for the bulk channel), so its truncation error
//! is small there. The fit is repeated on a range twice as far into the
//! channel; how far each coefficient moves is reported as its uncertainty
//! (the high members of a truncated tower absorb the truncation error and
//! are not determined).

use super::series::{self, Basis, Series, Q};
use super::special::blocks::{
    boundary_block, boundary_three_point_block, bulk_block, four_point_block_mixed,
    four_point_block_polar_mixed, Externals,
};
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::lower::Channel;
use num_traits::{One, Zero};

/// Largest relative residual at which an expansion counts as exact.
pub const DECOMPOSE_TOLERANCE: f64 = 1e-9;

/// Most dimensions a tower may expand to.
pub const MAX_BLOCKS: usize = 60;

/// A fitted block expansion (in JSON every field; `rows` as `[ξ, G,
/// expansion]` triples).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Decomposition {
    pub channel: Channel,
    /// The dimension Δ of the external operators.
    pub delta: f64,
    /// The exchanged dimensions, in order.
    pub dims: Vec<f64>,
    /// The spin of each exchanged operator (s-channel only; empty next to
    /// a wall).
    pub spins: Vec<u32>,
    /// Δ̂1 - Δ̂2 for a bulk–boundary–boundary function ⟨O Ô1 Ô2⟩ in the
    /// boundary channel, fitted in χ (docs/conventions.md §15); `None` for
    /// a two-point function (fitted in ξ) and the s-channel.
    pub delta12: Option<f64>,
    /// The identity's coefficient (bulk channel only).
    pub identity: Option<f64>,
    /// One coefficient per exchanged dimension.
    pub coefficients: Vec<f64>,
    /// How far each coefficient (the identity's first, in the bulk
    /// channel) moves when the fit is repeated on a range of ξ twice as far
    /// into the channel: an estimate of its uncertainty.
    pub spread: Vec<f64>,
    /// The range of ξ of the fit and the number of fit and check values.
    pub range: (f64, f64),
    pub fitted_at: usize,
    pub checked_at: usize,
    /// Largest |G - expansion| at the check values over the largest |G|.
    pub residual: f64,
    /// How the coefficients were found: order by order in the series of
    /// G and the blocks about the channel's limit (exact), or by least
    /// squares (where G or a dimension is not a rational series).
    pub method: Method,
    /// The exact coefficients of the series solve (the identity's first,
    /// as in `spread`), `p` or `p/q`; empty for a fit.
    pub exact: Vec<String>,
    /// Terms of G's series inside the span of the blocks that no block
    /// matched (an expansion has none); 0 for a fit.
    pub unmatched: usize,
    /// (ξ, G, expansion) at every fit and check value, ξ increasing.
    pub rows: Vec<(f64, f64, f64)>,
}

impl Decomposition {
    pub fn holds(&self) -> bool {
        self.residual <= DECOMPOSE_TOLERANCE && self.unmatched == 0
    }
}

/// How a decomposition's coefficients were found.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Method {
    Fit,
    Series,
}

/// Relative size below which the truncation of a tower is negligible at a
/// check value: the check range of a series solve ends where the first
/// terms of the remainder's series reach it.
pub const TRUNCATION_TARGET: f64 = 1e-12;

/// How many orders beyond the highest block the series are taken, for the
/// truncation estimate.
const EXTRA_ORDERS: i64 = 3;

/// A two-point function's exact data for the series solve: d, Δ and the
/// exchanged dimensions as rationals, and G as a series in the channel's
/// variable (1/ξ for the boundary channel, ξ for the bulk channel) known
/// to a given degree.
pub struct TwoPointSeries<'a> {
    pub d: Q,
    pub delta: Q,
    pub dims: Vec<Q>,
    pub g: &'a dyn Fn(&Q) -> Option<Series>,
}

/// A four-point function's exact data: the blocks (Δ, ℓ), Δ12 and Δ34 as
/// rationals, the largest twist and spin of the towers, and G as a series
/// in z, z̄ known to a given total degree.
pub struct FourPointSeries<'a> {
    pub blocks: Vec<(Q, u32)>,
    pub delta12: Q,
    pub delta34: Q,
    pub twist_max: Q,
    pub spin_max: u32,
    pub g: &'a dyn Fn(&Q) -> Option<Series>,
}

fn rat(n: i64) -> Q {
    Q::from_integer(n.into())
}

/// G to at least `want` (raising the cap while products lose precision).
fn series_to(
    g: &dyn Fn(&Q) -> Option<Series>,
    want: &Q,
    fix: &dyn Fn(Series) -> Option<Series>,
) -> Option<Series> {
    for margin in [0, 2, 4, 8, 16] {
        let gs = fix(g(&(want + rat(margin)))?)?;
        if gs.prec >= *want {
            return Some(gs);
        }
    }
    None
}

/// x^offset ₂F₁(a, b; c; s x) in variable `var` of `n`, known to `cap`.
fn hyp_series(n: usize, var: usize, offset: &Q, abc: [&Q; 3], s: &Q, cap: &Q) -> Option<Series> {
    let count = series::to_f64(&(cap - offset)).ceil().max(0.0) as usize + 2;
    if count > 2000 {
        return None;
    }
    let coeffs = series::hyp2f1_coefficients(abc[0], abc[1], abc[2], s, count)?;
    series::power_series(n, var, offset, &coeffs, cap)
}

/// The largest value of the channel variable in (lo, hi] where the
/// remainder's first terms are below [`TRUNCATION_TARGET`] of G's lowest
/// ones (`hi` when the remainder has none).
fn truncation_edge(beyond: &Series, g: &Series, lo: f64, hi: f64, factor: f64) -> f64 {
    if beyond.terms.is_empty() {
        return hi;
    }
    let val = g.valuation();
    let lead = Series {
        terms: g
            .terms
            .iter()
            .filter(|(e, _)| series::degree(e) == val)
            .map(|(e, c)| (e.clone(), c.clone()))
            .collect(),
        prec: g.prec.clone(),
    };
    let mut t = hi;
    while t > lo {
        if beyond.size_at(t) * factor.max(1.0) <= TRUNCATION_TARGET * lead.size_at(t) {
            return t;
        }
        t *= 0.95;
    }
    lo
}

/// The series solve of a two-point function next to the wall: the
/// coefficients (the identity's first in the bulk channel), the count of
/// unmatched terms, and the largest value of ξ (bulk) or 1/ξ (boundary)
/// where the tower's truncation is negligible.
fn solve_two_point(
    channel: Channel,
    s: &TwoPointSeries,
    x_max: f64,
) -> Option<(Vec<Q>, usize, f64)> {
    let half = Q::new(1.into(), 2.into());
    let mut bases = Vec::new();
    let pivot = |dim: &Q| -> Q {
        match channel {
            Channel::Bulk => dim * &half,
            _ => dim - &s.delta,
        }
    };
    let top = s.dims.iter().map(pivot).max()?.max(Q::zero());
    let want = &top + rat(EXTRA_ORDERS);
    if channel == Channel::Bulk {
        bases.push(Basis {
            pivot: vec![Q::zero()],
            series: Series::constant(Q::one(), 1, &want),
        });
    }
    let block = |dim: &Q| -> Option<Series> {
        let e = pivot(dim);
        match channel {
            Channel::Bulk => {
                let h = dim * &half;
                let c = dim + Q::one() - &s.d * &half;
                hyp_series(1, 0, &h, [&h, &h, &c], &rat(-1), &want)
            }
            Channel::Boundary => {
                let b = dim + Q::one() - &s.d * &half;
                if b.is_zero() {
                    // ₂F₁(a, ε; 2ε; z) → (1 + (1 - z)^(-a))/2, z = -w.
                    let one = Series::constant(Q::one(), 1, &want);
                    let w = Series::monomial(vec![Q::one()], Q::one(), &want);
                    let p = one.add(&w).pow(&(-dim), 1, &want)?;
                    one.add(&p)
                        .scale(&half)
                        .mul(&Series::monomial(vec![e], Q::one(), &want), &want)
                } else {
                    let c = &b + &b;
                    hyp_series(1, 0, &e, [dim, &b, &c], &rat(-1), &want)
                }
            }
            Channel::SChannel => None,
        }
    };
    for dim in &s.dims {
        bases.push(Basis {
            pivot: vec![pivot(dim)],
            series: block(dim)?,
        });
    }
    // The dimension whose block a monomial x^e leads.
    let dimension_of = |e: &Q| -> Q {
        match channel {
            Channel::Bulk => e + e,
            _ => e + &s.delta,
        }
    };
    let g = series_to(s.g, &want, &|g| Some(g))?;
    let m = series::solve(&g, &bases, &top, &|_| true, &|e| e[0] <= top, &|e| {
        // Not the identity (the bulk channel's is a given basis function).
        if e[0].is_zero() && channel == Channel::Bulk {
            return None;
        }
        block(&dimension_of(&e[0]))
    })?;
    let edge = truncation_edge(&m.beyond, &g, 1e-4 * x_max, x_max, 1.0);
    Some((m.coefficients, m.unmatched.len(), edge))
}

/// The series solve of a four-point function: the identity's coefficient
/// and the blocks', the count of unmatched terms, and the largest |z| where
/// the towers' truncation is negligible.
fn solve_four_point(d: u32, s: &FourPointSeries, r_max: f64) -> Option<(Vec<Q>, usize, f64)> {
    let half = Q::new(1.into(), 2.into());
    let a = -(&s.delta12 * &half);
    let b = &s.delta34 * &half;
    let shift = if d == 4 { rat(1) } else { rat(0) };
    // Pivots: z^((Δ+ℓ)/2) z̄^((Δ-ℓ)/2) (d = 2), z̄^(-1) less in d = 4,
    // where G and the blocks are multiplied by (z - z̄)/(z z̄).
    let pivot = |dim: &Q, l: u32| -> Vec<Q> {
        let l = rat(i64::from(l));
        vec![(dim + &l) * &half, (dim - &l) * &half - &shift]
    };
    let top = s
        .blocks
        .iter()
        .map(|(dim, l)| series::degree(&pivot(dim, *l)))
        .max()?
        .max(Q::zero());
    let want = &top + rat(EXTRA_ORDERS);
    let z = |e: Q| Series::monomial(vec![e, Q::zero()], Q::one(), &want);
    let zb = |e: Q| Series::monomial(vec![Q::zero(), e], Q::one(), &want);
    let mut bases = vec![Basis {
        pivot: vec![Q::zero(), -shift.clone()],
        series: if d == 4 {
            zb(rat(-1)).add(&z(rat(-1)).scale(&rat(-1)))
        } else {
            Series::constant(Q::one(), 2, &want)
        },
    }];
    let k = |beta: &Q, var: usize, other: &Q| -> Option<Series> {
        let h = beta * &half;
        let cap = &want + rat(1) + (-other).max(Q::zero());
        hyp_series(2, var, &h, [&(&h + &a), &(&h + &b), beta], &rat(1), &cap)
    };
    let block = |dim: &Q, l: u32| -> Option<Series> {
        let lq = rat(i64::from(l));
        let (b1, b2) = if d == 4 {
            (dim + &lq, dim - &lq - rat(2))
        } else {
            (dim + &lq, dim - &lq)
        };
        let (h1, h2) = (&b1 * &half, &b2 * &half);
        let one = k(&b1, 0, &h2)?.mul(&k(&b2, 1, &h1)?, &want)?;
        let two = k(&b2, 0, &h1)?.mul(&k(&b1, 1, &h2)?, &want)?;
        Some(match (d, l) {
            (4, _) => one.add(&two.scale(&rat(-1))),
            (_, 0) => one.add(&two).scale(&half),
            _ => one.add(&two),
        })
    };
    for (dim, l) in &s.blocks {
        bases.push(Basis {
            pivot: pivot(dim, *l),
            series: block(dim, *l)?,
        });
    }
    let fix = |g: Series| -> Option<Series> {
        if d != 4 {
            return Some(g);
        }
        let cap = g.prec.clone();
        let factor = Series::monomial(vec![rat(0), rat(-1)], Q::one(), &cap)
            .add(&Series::monomial(vec![rat(-1), rat(0)], rat(-1), &cap));
        g.mul(&factor, &cap)
    };
    let g = series_to(s.g, &want, &fix)?;
    let inside = |e: &[Q]| -> bool {
        let l = &e[0] - &e[1] - &shift;
        let twist = &e[1] + &e[1] + &shift + &shift;
        twist <= s.twist_max && l <= rat(i64::from(s.spin_max))
    };
    // The block a monomial z^a z̄^b (a ≥ b) leads: Δ = a + b (+ 1 in d = 4),
    // ℓ = a - b (- 1 in d = 4), a whole number ≥ 0.
    let make = |e: &[Q]| -> Option<Series> {
        let l = &e[0] - &e[1] - &shift;
        if !l.is_integer() || l < Q::zero() {
            return None;
        }
        let dim = &e[0] + &e[1] + &shift;
        if dim.is_zero() {
            return None;
        }
        block(&dim, num_traits::ToPrimitive::to_u32(&l.to_integer())?)
    };
    let m = series::solve(&g, &bases, &top, &|e: &[Q]| e[0] >= e[1], &inside, &make)?;
    let edge = truncation_edge(&m.beyond, &g, 1e-3, r_max, 1.0);
    Some((m.coefficients, m.unmatched.len(), edge))
}

fn numeric(why: impl Into<String>) -> Error {
    Error::new(ErrorKind::Numeric, why)
}

/// The basis function of one exchanged dimension at ξ.
fn block(
    channel: Channel,
    d: f64,
    delta: f64,
    delta12: Option<f64>,
    dim: f64,
    xi: f64,
) -> Result<f64> {
    if let Some(d12) = delta12 {
        return boundary_three_point_block(d, dim, d12, xi).map_err(|e| {
            numeric(format!(
                "the block of dimension {dim} has no value at χ = {xi}: {}",
                e.reason()
            ))
        });
    }
    let v = match channel {
        Channel::Bulk => bulk_block(d, dim, xi),
        Channel::Boundary => boundary_block(d, dim, xi).map(|f| xi.powf(delta) * f),
        Channel::SChannel => return Err(numeric("the s-channel is fitted in z and z̄")),
    };
    v.map_err(|e| {
        numeric(format!(
            "the block of dimension {dim} has no value at ξ = {xi}: {}",
            e.reason()
        ))
    })
}

/// Fits `g` in the blocks of `channel` with exchanged dimensions `dims`, in
/// dimension `d` for external operators of dimension `delta`. `tower` says
/// the dimensions are a truncated infinite family (fitted where it
/// converges). With `delta12` = Δ̂1 - Δ̂2, `g` is the F(χ) of a
/// bulk–boundary–boundary function and the blocks are `f_bdy3`
/// (docs/conventions.md §15), fitted at small χ (near the wall) for a
/// tower.
#[allow(clippy::too_many_arguments)] // the channel's data, then G two ways
pub fn fit(
    channel: Channel,
    d: f64,
    delta: f64,
    delta12: Option<f64>,
    dims: &[f64],
    tower: bool,
    g: &dyn Fn(f64) -> Result<f64>,
    exact: Option<&TwoPointSeries>,
) -> Result<Decomposition> {
    if dims.is_empty() {
        return Err(numeric("no dimension to expand in"));
    }
    let columns = dims.len() + usize::from(channel == Channel::Bulk);
    let range: (f64, f64) = match (channel, tower) {
        _ if delta12.is_some() && tower => (0.001, 0.3),
        _ if delta12.is_some() => (0.001, 0.3),
        (Channel::Boundary, true) => (4.0, 400.0),
        (Channel::Bulk, true) => (0.0025, 0.25),
        _ => (0.05, 20.0),
    };
    // The second fit, further into the channel's convergence region.
    let further = match channel {
        _ if delta12.is_some() => (0.5 * range.0, 0.5 * range.1),
        Channel::Boundary => (2.0 * range.0, 2.0 * range.1),
        Channel::Bulk | Channel::SChannel => (0.5 * range.0, 0.5 * range.1),
    };
    let n_fit = (2 * columns + 10).max(16);
    let sample = |r: (f64, f64), k: f64| {
        if delta12.is_some() {
            // Chebyshev nodes of [r.0, r.1] (k whole) and the values between
            // them (k + 1/2): the blocks are near powers of χ there, which
            // log-spaced values crowded at small χ resolve far worse.
            let t = 0.5 * (1.0 - (std::f64::consts::PI * (k + 0.5) / n_fit as f64).cos());
            return r.0 + (r.1 - r.0) * t;
        }
        let (a, b) = (r.0.ln(), r.1.ln());
        (a + (b - a) * k / (n_fit - 1) as f64).exp()
    };
    let row = |xi: f64| -> Result<Vec<f64>> {
        let mut r = Vec::with_capacity(columns);
        if channel == Channel::Bulk {
            r.push(1.0);
        }
        for &dim in dims {
            r.push(block(channel, d, delta, delta12, dim, xi)?);
        }
        Ok(r)
    };
    type Fitted = (Vec<f64>, Vec<(f64, f64)>);
    let solve = |r: (f64, f64)| -> Result<Fitted> {
        let xs: Vec<f64> = (0..n_fit).map(|k| sample(r, k as f64)).collect();
        let mut a: Vec<Vec<f64>> = xs.iter().map(|&x| row(x)).collect::<Result<_>>()?;
        let mut b: Vec<f64> = xs.iter().map(|&x| g(x)).collect::<Result<_>>()?;
        if b.iter().any(|v| !v.is_finite()) {
            return Err(numeric("the correlator has no finite value at some ξ"));
        }
        let at: Vec<(f64, f64)> = xs.iter().copied().zip(b.iter().copied()).collect();
        Ok((least_squares(&mut a, &mut b, columns)?, at))
    };
    // The variable of the series: 1/ξ (boundary), ξ (bulk).
    let x_max = match channel {
        Channel::Boundary => 1.0 / range.0,
        _ => range.1,
    };
    let solved = match exact {
        Some(s) if delta12.is_none() => solve_two_point(channel, s, x_max),
        _ => None,
    };
    let (x, spread, fit_rows, check_range, method, exact_text, unmatched) = match solved {
        Some((c, unmatched, edge)) => {
            let check_range = match channel {
                Channel::Boundary => {
                    let lo = (1.0 / edge).max(range.0);
                    (lo, range.1.max(10.0 * lo))
                }
                _ => {
                    let hi = edge.min(range.1);
                    (range.0.min(0.1 * hi), hi)
                }
            };
            let x: Vec<f64> = c.iter().map(series::to_f64).collect();
            let fit_rows = (0..n_fit)
                .map(|k| {
                    let xi = sample(check_range, k as f64);
                    Ok((xi, g(xi)?))
                })
                .collect::<Result<Vec<_>>>()?;
            (
                x,
                vec![0.0; c.len()],
                fit_rows,
                check_range,
                Method::Series,
                c.iter().map(series::text).collect(),
                unmatched,
            )
        }
        None => {
            let (x, fit_rows) = solve(range)?;
            let (y, _) = solve(further)?;
            let spread: Vec<f64> = x.iter().zip(&y).map(|(p, q)| (p - q).abs()).collect();
            (x, spread, fit_rows, range, Method::Fit, Vec::new(), 0)
        }
    };
    let check_xi: Vec<f64> = (0..n_fit - 1)
        .map(|k| sample(check_range, k as f64 + 0.5))
        .collect();
    let expansion =
        |xi: f64| -> Result<f64> { Ok(row(xi)?.iter().zip(&x).map(|(r, c)| r * c).sum()) };
    let mut rows = Vec::new();
    let (mut worst, mut size) = (0.0f64, 0.0f64);
    let mut checked = check_xi.clone();
    if method == Method::Series {
        checked.extend(fit_rows.iter().map(|r| r.0));
    }
    for &xi in &check_xi {
        let gv = g(xi)?;
        let e = expansion(xi)?;
        rows.push((xi, gv, e));
    }
    for (xi, gv) in fit_rows {
        rows.push((xi, gv, expansion(xi)?));
    }
    for &(xi, gv, e) in &rows {
        if checked.contains(&xi) {
            worst = worst.max((gv - e).abs());
            size = size.max(gv.abs());
        }
    }
    rows.sort_by(|p, q| p.0.total_cmp(&q.0));
    let (identity, coefficients) = match channel {
        Channel::Bulk | Channel::SChannel => (Some(x[0]), x[1..].to_vec()),
        Channel::Boundary => (None, x),
    };
    Ok(Decomposition {
        channel,
        delta,
        dims: dims.to_vec(),
        spins: Vec::new(),
        delta12,
        identity,
        coefficients,
        spread,
        range: check_range,
        fitted_at: if method == Method::Series { 0 } else { n_fit },
        checked_at: checked.len(),
        residual: if size > 0.0 { worst / size } else { worst },
        method,
        exact: exact_text,
        unmatched,
        rows,
    })
}

/// Where a four-point function is sampled: real z, z̄ in (0, 1), or
/// Euclidean configurations z = r e^(iθ), z̄ = z* (G a function of u, v).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Frame {
    /// Coordinates (z, z̄), z̄ = z t below z.
    Real,
    /// Coordinates (r, θ): u = r², v = 1 - 2 r cos θ + r².
    Euclidean,
}

/// Fits a four-point function G of identical scalars without a wall in the
/// identity and the s-channel blocks `blocks` (dimension, spin) in
/// dimension `d` (2 or 4): G = c_1 + Σ c_k g_block(Δ_k, ℓ_k; z, z̄)
/// (docs/conventions.md §14). `g` takes the frame's two coordinates. The
/// fit values are a grid: the radius r (z itself in the real frame) from
/// [`FOUR_POINT_RANGE`] (logarithmic; at Chebyshev values of
/// [`EUCLIDEAN_RANGE`] in the Euclidean frame) resolves the dimensions, the angle
/// θ in [1/10, π - 1/10] (z̄/z in [1/50, 49/50] in the real frame) the
/// spins; the check values lie between them; the second fit, for the
/// uncertainties, is on r halved. Euclidean configurations condition the
/// fit far better (the spins are Gegenbauer polynomials in cos θ there,
/// against powers of z̄/z on the real line).
pub fn fit_four_point(
    d: u32,
    blocks: &[(f64, u32)],
    ext: Externals,
    frame: Frame,
    g: &dyn Fn(f64, f64) -> Result<f64>,
    exact: Option<&FourPointSeries>,
) -> Result<Decomposition> {
    if blocks.is_empty() {
        return Err(numeric("no block to expand in"));
    }
    let columns = blocks.len() + 1;
    let mut spins: Vec<u32> = blocks.iter().map(|b| b.1).collect();
    spins.sort_unstable();
    spins.dedup();
    let n_t = (spins.len() + 4).max(6);
    let n_r = (2 * columns + 10)
        .div_ceil(n_t)
        .max(blocks.len() / spins.len().max(1) + 4);
    let range = match frame {
        Frame::Real => FOUR_POINT_RANGE,
        Frame::Euclidean => EUCLIDEAN_RANGE,
    };
    let angle = |x: f64| match frame {
        Frame::Real => 0.02 + 0.96 * x,
        Frame::Euclidean => 0.1 + (std::f64::consts::PI - 0.2) * x,
    };
    let grid = |r: (f64, f64), shift: f64| -> Vec<(f64, f64)> {
        let (a, b) = (r.0.ln(), r.1.ln());
        let mut out = Vec::with_capacity(n_r * n_t);
        for i in 0..n_r {
            let rr = match frame {
                // Chebyshev nodes of the radial range (shift 1/2: the values
                // between them): the blocks are near powers of r, which
                // log-spaced radii crowded at small r resolve worse.
                Frame::Euclidean => {
                    let k = i as f64 + shift;
                    let t = 0.5 * (1.0 - (std::f64::consts::PI * (k + 0.5) / n_r as f64).cos());
                    r.0 + (r.1 - r.0) * t
                }
                Frame::Real => (a + (b - a) * (i as f64 + shift) / (n_r - 1) as f64).exp(),
            };
            for j in 0..n_t {
                let t = angle((j as f64 + shift) / (n_t - 1) as f64);
                out.push(match frame {
                    Frame::Real => (rr, rr * t),
                    Frame::Euclidean => (rr, t),
                });
            }
        }
        out
    };
    let row = |p: f64, q: f64| -> Result<Vec<f64>> {
        let mut r = Vec::with_capacity(columns);
        r.push(1.0);
        for &(dim, spin) in blocks {
            let v = match frame {
                Frame::Real => four_point_block_mixed(d, dim, spin, ext, p, q),
                Frame::Euclidean => four_point_block_polar_mixed(d, dim, spin, ext, p, q),
            };
            r.push(v.map_err(|e| {
                numeric(format!(
                    "the block Δ = {dim}, ℓ = {spin} has no value at {}: {}",
                    at(frame, p, q),
                    e.reason()
                ))
            })?);
        }
        Ok(r)
    };
    let value = |p: f64, q: f64| -> Result<f64> {
        let v = g(p, q)?;
        if v.is_finite() {
            Ok(v)
        } else {
            Err(numeric(format!(
                "the four-point function has no finite value at {}",
                at(frame, p, q)
            )))
        }
    };
    let solve = |r: (f64, f64)| -> Result<Vec<f64>> {
        let points = grid(r, 0.0);
        let mut a: Vec<Vec<f64>> = points
            .iter()
            .map(|p| row(p.0, p.1))
            .collect::<Result<_>>()?;
        let mut b: Vec<f64> = points
            .iter()
            .map(|p| value(p.0, p.1))
            .collect::<Result<_>>()?;
        least_squares(&mut a, &mut b, columns)
    };
    let solved = exact.and_then(|s| solve_four_point(d, s, range.1));
    let (x, spread, check_range, method, exact_text, unmatched) = match solved {
        Some((c, unmatched, edge)) => {
            let hi = edge.min(range.1);
            (
                c.iter().map(series::to_f64).collect::<Vec<f64>>(),
                vec![0.0; c.len()],
                (0.25 * hi, hi),
                Method::Series,
                c.iter().map(series::text).collect::<Vec<String>>(),
                unmatched,
            )
        }
        None => {
            let x = solve(range)?;
            let y = solve((0.5 * range.0, 0.5 * range.1))?;
            let spread: Vec<f64> = x.iter().zip(&y).map(|(p, q)| (p - q).abs()).collect();
            (x, spread, range, Method::Fit, Vec::new(), 0)
        }
    };
    let expansion =
        |p: f64, q: f64| -> Result<f64> { Ok(row(p, q)?.iter().zip(&x).map(|(r, c)| r * c).sum()) };
    let mut check: Vec<(f64, f64)> = grid(check_range, 0.5);
    if method == Method::Series {
        check.extend(grid(check_range, 0.0));
    }
    check.retain(|p| {
        p.0 <= check_range.1 && angle(1.0) >= p.1 / if frame == Frame::Real { p.0 } else { 1.0 }
    });
    let (mut worst, mut size) = (0.0f64, 0.0f64);
    for &(p, q) in &check {
        let gv = value(p, q)?;
        worst = worst.max((gv - expansion(p, q)?).abs());
        size = size.max(gv.abs());
    }
    // The rows of the table and the figure: G and the expansion against
    // r, along z̄ = z/2 (real) or θ = π/2 (Euclidean).
    let mut rows = Vec::new();
    for k in 0..2 * n_r {
        let (a, b) = (check_range.0.ln(), check_range.1.ln());
        let r = (a + (b - a) * k as f64 / (2 * n_r - 1) as f64).exp();
        let q = match frame {
            Frame::Real => 0.5 * r,
            Frame::Euclidean => std::f64::consts::FRAC_PI_2,
        };
        rows.push((r, value(r, q)?, expansion(r, q)?));
    }
    Ok(Decomposition {
        channel: Channel::SChannel,
        delta: 0.0,
        dims: blocks.iter().map(|b| b.0).collect(),
        spins: blocks.iter().map(|b| b.1).collect(),
        delta12: None,
        identity: Some(x[0]),
        coefficients: x[1..].to_vec(),
        spread,
        range: check_range,
        fitted_at: if method == Method::Series {
            0
        } else {
            n_r * n_t
        },
        checked_at: check.len(),
        residual: if size > 0.0 { worst / size } else { worst },
        method,
        exact: exact_text,
        unmatched,
        rows,
    })
}

fn at(frame: Frame, p: f64, q: f64) -> String {
    match frame {
        Frame::Real => format!("z = {p}, z̄ = {q}"),
        Frame::Euclidean => format!("|z| = {p}, arg z = {q}"),
    }
}

/// The range of |z| of a four-point fit at Euclidean configurations.
pub const EUCLIDEAN_RANGE: (f64, f64) = (0.02, 0.2);

/// The range of z of a four-point fit (z̄ below z).
pub const FOUR_POINT_RANGE: (f64, f64) = (0.02, 0.3);

/// Least squares min |A x - b| by Householder QR, columns scaled to unit
/// length first (common practice). `a` is rows × `n`.
#[allow(clippy::needless_range_loop)] // the reflections read best as index loops
pub(crate) fn least_squares(a: &mut [Vec<f64>], b: &mut [f64], n: usize) -> Result<Vec<f64>> {
    let m = a.len();
    let mut scale = vec![0.0; n];
    for (j, s) in scale.iter_mut().enumerate() {
        *s = a.iter().map(|r| r[j] * r[j]).sum::<f64>().sqrt();
        if *s == 0.0 || !s.is_finite() {
            return Err(numeric(format!(
                "block {} vanishes at every sample value of ξ",
                j + 1
            )));
        }
        for r in a.iter_mut() {
            r[j] /= *s;
        }
    }
    for k in 0..n {
        let norm = (k..m).map(|i| a[i][k] * a[i][k]).sum::<f64>().sqrt();
        if norm < 1e-13 {
            return Err(numeric(
                "the blocks are not independent at the sample values of ξ: two dimensions give the same function",
            ));
        }
        let alpha = if a[k][k] > 0.0 { -norm } else { norm };
        let mut v: Vec<f64> = (k..m).map(|i| a[i][k]).collect();
        v[0] -= alpha;
        let vv: f64 = v.iter().map(|x| x * x).sum();
        if vv > 0.0 {
            for j in k..n {
                let dot: f64 = (k..m).map(|i| v[i - k] * a[i][j]).sum();
                let f = 2.0 * dot / vv;
                for i in k..m {
                    a[i][j] -= f * v[i - k];
                }
            }
            let dot: f64 = (k..m).map(|i| v[i - k] * b[i]).sum();
            let f = 2.0 * dot / vv;
            for i in k..m {
                b[i] -= f * v[i - k];
            }
        }
    }
    let mut x = vec![0.0; n];
    for k in (0..n).rev() {
        let s: f64 = (k + 1..n).map(|j| a[k][j] * x[j]).sum();
        x[k] = (b[k] - s) / a[k][k];
    }
    Ok(x.iter().zip(&scale).map(|(v, s)| v / s).collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn least_squares_solves_an_exact_system() {
        // x = (1, -2, 0.5) through five rows.
        let rows = [
            [1.0, 0.0, 2.0],
            [0.0, 1.0, 1.0],
            [1.0, 1.0, 0.0],
            [2.0, -1.0, 1.0],
            [0.5, 3.0, -1.0],
        ];
        let want = [1.0, -2.0, 0.5];
        let mut a: Vec<Vec<f64>> = rows.iter().map(|r| r.to_vec()).collect();
        let mut b: Vec<f64> = rows
            .iter()
            .map(|r| r.iter().zip(&want).map(|(x, y)| x * y).sum())
            .collect();
        let x = least_squares(&mut a, &mut b, 3).unwrap();
        for (got, w) in x.iter().zip(&want) {
            assert!((got - w).abs() < 1e-13, "{got} vs {w}");
        }
    }

    #[test]
    fn dependent_blocks_are_refused() {
        let g = |xi: f64| Ok(1.0 + xi);
        let err = fit(
            Channel::Boundary,
            3.0,
            0.5,
            None,
            &[1.5, 1.5],
            false,
            &g,
            None,
        )
        .unwrap_err();
        assert!(err.message.contains("not independent"), "{}", err.message);
    }
}
