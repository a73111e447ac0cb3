//! Nested one-dimensional rules: Fejér's second rule for a Jacobi weight.
//!
//! Level l ≥ 1 has the 2^l - 1 interior Chebyshev extreme points
//! x_j = cos(jπ/N), N = 2^l, j = 1 … N - 1; the points of level l are
//! among those of level l + 1 (the even j), so a refinement evaluates only
//! the 2^l new ones. The weights integrate the interpolating polynomial of
//! degree N - 2 exactly against (1 - x)^α (1 + x)^β: writing the
//! interpolant as p(cos θ) sin θ = Σ_{k=1}^{N-1} b_k sin kθ (discrete sine
//! orthogonality at the nodes gives b_k), ∫ w p = Σ b_k ν_k with the
//! modified moments ν_k = ∫ w U_{k-1} (common practice: Fejér 1933 for
//! α = β = 0; modified moments as in Piessens' generalised Clenshaw–Curtis
//! rules). The moments are computed exactly by a Gauss–Jacobi rule of
//! N/2 + 1 points. Every node is interior, so the endpoints (the rim of a
//! hemisphere on the wall, the point at infinity of the boundary plane) are
//! never evaluated.
//!
//! Nodes are numbered in the order they appear: level 1 has node 0 (x = 0),
//! level 2 adds nodes 1, 2, level 3 nodes 3 … 6, and so on; a level's rule
//! is a prefix of that numbering.

use std::collections::HashMap;
use std::f64::consts::PI;
use std::sync::{Arc, Mutex, OnceLock};

use super::gauss::gauss_jacobi;

/// The finest level built: 4095 nodes.
pub const MAX_LEVEL: usize = 12;

/// The nodes of level `level`: 2^level - 1.
pub fn count(level: usize) -> usize {
    (1usize << level) - 1
}

/// The level at which node `i` (in order of appearance) first appears.
pub fn level_of(i: usize) -> usize {
    (usize::BITS - (i + 1).leading_zeros()) as usize
}

/// One level of the nested rule: the nodes of the level in order of
/// appearance and their weights.
#[derive(Clone, Debug, PartialEq)]
pub struct Nested {
    pub nodes: Vec<f64>,
    pub weights: Vec<f64>,
}

/// The nested rule of `level` (1 ≤ level ≤ [`MAX_LEVEL`]) for the weight
/// (1 - x)^α (1 + x)^β, α and β multiples of ½ greater than -1. Built once
/// per (α, β, level) and kept.
///
/// # Panics
///
/// If the level is out of range or α, β are not as above; the surfaces call
/// it with fixed exponents and levels they bound, never with user input.
pub fn fejer(level: usize, alpha: f64, beta: f64) -> Arc<Nested> {
    assert!(
        (1..=MAX_LEVEL).contains(&level),
        "fejer: level {level} out of range"
    );
    type Cache = Mutex<HashMap<(i32, i32, usize), Arc<Nested>>>;
    static CACHE: OnceLock<Cache> = OnceLock::new();
    let key = ((2.0 * alpha) as i32, (2.0 * beta) as i32, level);
    let cache = CACHE.get_or_init(|| Mutex::new(HashMap::new()));
    if let Some(rule) = cache.lock().ok().and_then(|c| c.get(&key).cloned()) {
        return rule;
    }
    let rule = Arc::new(build(level, alpha, beta));
    if let Ok(mut c) = cache.lock() {
        c.insert(key, Arc::clone(&rule));
    }
    rule
}

fn build(level: usize, alpha: f64, beta: f64) -> Nested {
    let n = 1usize << level;
    // ν_k = ∫ w U_{k-1}, k = 1 … n - 1, by Gauss–Jacobi (degree ≤ n - 2).
    let gauss = gauss_jacobi(n / 2 + 1, alpha, beta);
    let mut nu = vec![0.0; n];
    for (&x, &w) in gauss.nodes.iter().zip(&gauss.weights) {
        let (mut prev, mut u) = (0.0, 1.0);
        for slot in nu.iter_mut().skip(1) {
            *slot += w * u;
            let next = 2.0 * x * u - prev;
            prev = u;
            u = next;
        }
    }
    // sin(mπ/n) for m = 0 … 2n - 1.
    let sines: Vec<f64> = (0..2 * n)
        .map(|m| (m as f64 * PI / n as f64).sin())
        .collect();
    let mut nodes = Vec::with_capacity(n - 1);
    let mut weights = Vec::with_capacity(n - 1);
    for i in 0..count(level) {
        let l = level_of(i);
        let j = (2 * (i + 1 - (1 << (l - 1))) + 1) << (level - l);
        // W_j = (2/n) sin θ_j Σ_k ν_k sin kθ_j.
        let s: f64 = (1..n).map(|k| nu[k] * sines[(k * j) % (2 * n)]).sum();
        nodes.push((j as f64 * PI / n as f64).cos());
        weights.push(2.0 / n as f64 * sines[j] * s);
    }
    Nested { nodes, weights }
}

#[cfg(test)]
mod tests {
    use super::super::gauss::zeroth_moment;
    use super::*;

    #[test]
    fn levels_are_nested_and_numbered_in_order() {
        assert_eq!(
            (level_of(0), level_of(1), level_of(2), level_of(3)),
            (1, 2, 2, 3)
        );
        assert_eq!(level_of(6), 3);
        assert_eq!(level_of(7), 4);
        for level in 1..8 {
            let fine = fejer(level + 1, 0.5, 0.5);
            let coarse = fejer(level, 0.5, 0.5);
            assert_eq!(fine.nodes.len(), count(level + 1));
            assert_eq!(&fine.nodes[..coarse.nodes.len()], &coarse.nodes[..]);
        }
    }

    #[test]
    fn exact_for_polynomials_of_degree_n_minus_2() {
        // m_j from m_0 and (α + β + 2 + j) m_{j+1} = (β - α) m_j + j m_{j-1}
        // (derived, as in gauss.rs).
        for (alpha, beta) in [(0.0, 0.0), (0.5, 0.5), (-0.5, -0.5), (1.5, 0.0), (0.0, 4.0)] {
            for level in 1..=7 {
                let rule = fejer(level, alpha, beta);
                let degree = (1 << level) - 2;
                let mut m = vec![zeroth_moment(alpha, beta)];
                for j in 0..degree {
                    let before = if j == 0 { 0.0 } else { m[j - 1] };
                    m.push(
                        ((beta - alpha) * m[j] + j as f64 * before)
                            / (alpha + beta + 2.0 + j as f64),
                    );
                }
                for (j, want) in m.iter().enumerate() {
                    let got: f64 = rule
                        .nodes
                        .iter()
                        .zip(&rule.weights)
                        .map(|(x, w)| w * x.powi(j as i32))
                        .sum();
                    assert!(
                        (got - want).abs() < 1e-13 * m[0],
                        "α = {alpha}, β = {beta}, level {level}, x^{j}: {got} vs {want}"
                    );
                }
            }
        }
    }
}
