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

use super::special::blocks::{
    boundary_block, boundary_three_point_block, bulk_block, four_point_block,
    four_point_block_polar,
};
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::lower::Channel;

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
    /// (ξ, G, expansion) at every fit and check value, ξ increasing.
    pub rows: Vec<(f64, f64, f64)>,
}

impl Decomposition {
    pub fn holds(&self) -> bool {
        self.residual <= DECOMPOSE_TOLERANCE
    }
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
pub fn fit(
    channel: Channel,
    d: f64,
    delta: f64,
    delta12: Option<f64>,
    dims: &[f64],
    tower: bool,
    g: &dyn Fn(f64) -> Result<f64>,
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
    let (x, fit_rows) = solve(range)?;
    let (y, _) = solve(further)?;
    let spread: Vec<f64> = x.iter().zip(&y).map(|(p, q)| (p - q).abs()).collect();
    let check_xi: Vec<f64> = (0..n_fit - 1)
        .map(|k| sample(range, k as f64 + 0.5))
        .collect();
    let expansion =
        |xi: f64| -> Result<f64> { Ok(row(xi)?.iter().zip(&x).map(|(r, c)| r * c).sum()) };
    let mut rows = Vec::new();
    let (mut worst, mut size) = (0.0f64, 0.0f64);
    for &xi in &check_xi {
        let gv = g(xi)?;
        let e = expansion(xi)?;
        worst = worst.max((gv - e).abs());
        size = size.max(gv.abs());
        rows.push((xi, gv, e));
    }
    for (xi, gv) in fit_rows {
        rows.push((xi, gv, expansion(xi)?));
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
        range,
        fitted_at: n_fit,
        checked_at: check_xi.len(),
        residual: if size > 0.0 { worst / size } else { worst },
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
    frame: Frame,
    g: &dyn Fn(f64, f64) -> Result<f64>,
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
                Frame::Real => four_point_block(d, dim, spin, p, q),
                Frame::Euclidean => four_point_block_polar(d, dim, spin, p, q),
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
    let x = solve(range)?;
    let y = solve((0.5 * range.0, 0.5 * range.1))?;
    let spread: Vec<f64> = x.iter().zip(&y).map(|(p, q)| (p - q).abs()).collect();
    let expansion =
        |p: f64, q: f64| -> Result<f64> { Ok(row(p, q)?.iter().zip(&x).map(|(r, c)| r * c).sum()) };
    let mut check: Vec<(f64, f64)> = grid(range, 0.5);
    check.retain(|p| {
        p.0 <= range.1 && angle(1.0) >= p.1 / if frame == Frame::Real { p.0 } else { 1.0 }
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
        let (a, b) = (range.0.ln(), range.1.ln());
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
        range,
        fitted_at: n_r * n_t,
        checked_at: check.len(),
        residual: if size > 0.0 { worst / size } else { worst },
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
        let err = fit(Channel::Boundary, 3.0, 0.5, None, &[1.5, 1.5], false, &g).unwrap_err();
        assert!(err.message.contains("not independent"), "{}", err.message);
    }
}
