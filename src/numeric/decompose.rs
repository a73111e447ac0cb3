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

use super::special::blocks::{boundary_block, bulk_block};
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
fn block(channel: Channel, d: f64, delta: f64, dim: f64, xi: f64) -> Result<f64> {
    let v = match channel {
        Channel::Bulk => bulk_block(d, dim, xi),
        Channel::Boundary => boundary_block(d, dim, xi).map(|f| xi.powf(delta) * f),
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
/// converges).
pub fn fit(
    channel: Channel,
    d: f64,
    delta: f64,
    dims: &[f64],
    tower: bool,
    g: &dyn Fn(f64) -> Result<f64>,
) -> Result<Decomposition> {
    if dims.is_empty() {
        return Err(numeric("no dimension to expand in"));
    }
    let columns = dims.len() + usize::from(channel == Channel::Bulk);
    let range: (f64, f64) = match (channel, tower) {
        (Channel::Boundary, true) => (4.0, 400.0),
        (Channel::Bulk, true) => (0.0025, 0.25),
        _ => (0.05, 20.0),
    };
    // The second fit, further into the channel's convergence region.
    let further = match channel {
        Channel::Boundary => (2.0 * range.0, 2.0 * range.1),
        Channel::Bulk => (0.5 * range.0, 0.5 * range.1),
    };
    let n_fit = (2 * columns + 10).max(16);
    let sample = |r: (f64, f64), k: f64| {
        let (a, b) = (r.0.ln(), r.1.ln());
        (a + (b - a) * k / (n_fit - 1) as f64).exp()
    };
    let row = |xi: f64| -> Result<Vec<f64>> {
        let mut r = Vec::with_capacity(columns);
        if channel == Channel::Bulk {
            r.push(1.0);
        }
        for &dim in dims {
            r.push(block(channel, d, delta, dim, xi)?);
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
        Channel::Bulk => (Some(x[0]), x[1..].to_vec()),
        Channel::Boundary => (None, x),
    };
    Ok(Decomposition {
        channel,
        delta,
        dims: dims.to_vec(),
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

/// Least squares min |A x - b| by Householder QR, columns scaled to unit
/// length first (common practice). `a` is rows × `n`.
#[allow(clippy::needless_range_loop)] // the reflections read best as index loops
fn least_squares(a: &mut [Vec<f64>], b: &mut [f64], n: usize) -> Result<Vec<f64>> {
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
        let err = fit(Channel::Boundary, 3.0, 0.5, &[1.5, 1.5], false, &g).unwrap_err();
        assert!(err.message.contains("not independent"), "{}", err.message);
    }
}
