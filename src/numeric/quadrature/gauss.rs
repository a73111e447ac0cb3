//! One-dimensional Gauss rules on [-1, 1]: Gauss–Jacobi nodes and weights
//! for the weight (1 - x)^α (1 + x)^β, found by Newton iteration on the
//! three-term recurrence of the Jacobi polynomials, with Gauss–Legendre
//! (α = β = 0) and Gauss–Chebyshev (α = β = -½, in closed form) as the
//! special cases the surfaces use.
//!
//! An n-point rule integrates polynomials of degree 2n - 1 exactly against
//! its weight. The endpoint factors are how the surfaces absorb the
//! (1 - t²)^{(m-2)/2} of hyperspherical coordinates on S^m and the ρ^{d-2} of
//! polar coordinates, so that what remains of a smooth integrand is smooth
//! and the rules converge geometrically.

use std::f64::consts::PI;

/// Nodes (ascending) and weights of a one-dimensional rule on [-1, 1].
#[derive(Clone, Debug, PartialEq)]
pub struct Gauss {
    pub nodes: Vec<f64>,
    pub weights: Vec<f64>,
}

impl Gauss {
    /// The number of nodes.
    pub fn len(&self) -> usize {
        self.nodes.len()
    }

    /// Whether the rule has no nodes (n = 0).
    pub fn is_empty(&self) -> bool {
        self.nodes.is_empty()
    }

    /// Σ w_i f(x_i).
    pub fn sum(&self, f: impl Fn(f64) -> f64) -> f64 {
        self.nodes
            .iter()
            .zip(&self.weights)
            .map(|(&x, &w)| w * f(x))
            .sum()
    }
}

/// The n-point Gauss–Legendre rule: ∫_{-1}^{1} f(x) dx.
pub fn gauss_legendre(n: usize) -> Gauss {
    gauss_jacobi(n, 0.0, 0.0)
}

/// The n-point Gauss–Jacobi rule: ∫_{-1}^{1} (1 - x)^α (1 + x)^β f(x) dx.
///
/// α and β must be multiples of ½ greater than -1 (the surfaces need no
/// others): the weights are normalised to the exact zeroth moment, which is
/// computed from Γ at half-integers.
///
/// # Panics
///
/// If α or β is not a multiple of ½ greater than -1. The surfaces call it
/// with fixed exponents, never with user input.
pub fn gauss_jacobi(n: usize, alpha: f64, beta: f64) -> Gauss {
    assert!(
        is_half_integer(alpha) && is_half_integer(beta) && alpha > -1.0 && beta > -1.0,
        "gauss_jacobi: α = {alpha}, β = {beta} must be multiples of ½ greater than -1"
    );
    if n == 0 {
        return Gauss {
            nodes: Vec::new(),
            weights: Vec::new(),
        };
    }
    if alpha == -0.5 && beta == -0.5 {
        return gauss_chebyshev(n);
    }
    let jacobi = Jacobi { n, alpha, beta };
    // Roots in descending order, then weights ∝ 1 / ((1 - x²) P_n'(x)²).
    let mut roots: Vec<f64> = Vec::with_capacity(n);
    let symmetric = alpha == beta;
    let count = if symmetric { n / 2 } else { n };
    let mut known: Vec<f64> = Vec::with_capacity(n);
    if symmetric && n % 2 == 1 {
        known.push(0.0);
    }
    for k in 1..=count {
        let x = jacobi.root(k, &known);
        roots.push(x);
        known.push(x);
        if symmetric {
            known.push(-x);
        }
    }
    let mut nodes: Vec<f64> = Vec::with_capacity(n);
    let mut weights: Vec<f64> = Vec::with_capacity(n);
    if symmetric {
        // Ascending: the negative roots, 0 when n is odd, the positive ones.
        for &x in &roots {
            nodes.push(-x);
            weights.push(jacobi.raw_weight(x));
        }
        if n % 2 == 1 {
            nodes.push(0.0);
            weights.push(jacobi.raw_weight(0.0));
        }
        for &x in roots.iter().rev() {
            nodes.push(x);
            weights.push(jacobi.raw_weight(x));
        }
    } else {
        for &x in roots.iter().rev() {
            nodes.push(x);
            weights.push(jacobi.raw_weight(x));
        }
    }
    let total: f64 = weights.iter().sum();
    let scale = zeroth_moment(alpha, beta) / total;
    for w in &mut weights {
        *w *= scale;
    }
    Gauss { nodes, weights }
}

/// ∫_{-1}^{1} (1 - x)^α (1 + x)^β dx = 2^{α+β+1} Γ(α+1) Γ(β+1) / Γ(α+β+2)
/// (common practice).
pub(crate) fn zeroth_moment(alpha: f64, beta: f64) -> f64 {
    2f64.powf(alpha + beta + 1.0) * gamma_half(alpha + 1.0) * gamma_half(beta + 1.0)
        / gamma_half(alpha + beta + 2.0)
}

/// Γ(x) for x a positive multiple of ½, by Γ(x + 1) = x Γ(x) from Γ(1) = 1
/// and Γ(½) = √π.
fn gamma_half(x: f64) -> f64 {
    let (mut g, mut t) = if x.fract() == 0.0 {
        (1.0, 1.0)
    } else {
        (PI.sqrt(), 0.5)
    };
    while t < x {
        g *= t;
        t += 1.0;
    }
    g
}

fn is_half_integer(x: f64) -> bool {
    (2.0 * x).fract() == 0.0
}

/// Gauss–Chebyshev of the first kind, α = β = -½: x_k = cos((2k - 1)π / 2n),
/// w_k = π/n (common practice).
fn gauss_chebyshev(n: usize) -> Gauss {
    let nodes = (1..=n)
        .rev()
        .map(|k| ((2 * k - 1) as f64 * PI / (2 * n) as f64).cos())
        .collect();
    Gauss {
        nodes,
        weights: vec![PI / n as f64; n],
    }
}

/// The Jacobi polynomial P_n^{(α,β)}.
struct Jacobi {
    n: usize,
    alpha: f64,
    beta: f64,
}

impl Jacobi {
    /// (P_n(x), P_n'(x)) by the recurrence of Abramowitz & Stegun 22.7.1 and
    /// the derivative identity 22.8.1 (common practice).
    fn eval(&self, x: f64) -> (f64, f64) {
        let (a, b) = (self.alpha, self.beta);
        let mut prev = 1.0;
        let mut p = 0.5 * ((a - b) + (a + b + 2.0) * x);
        for k in 1..self.n {
            let k = k as f64;
            let s = 2.0 * k + a + b;
            let c1 = 2.0 * (k + 1.0) * (k + a + b + 1.0) * s;
            let c2 = (s + 1.0) * (a * a - b * b);
            let c3 = s * (s + 1.0) * (s + 2.0);
            let c4 = 2.0 * (k + a) * (k + b) * (s + 2.0);
            let next = ((c2 + c3 * x) * p - c4 * prev) / c1;
            prev = p;
            p = next;
        }
        let n = self.n as f64;
        let s = 2.0 * n + a + b;
        let dp = (n * ((a - b) - s * x) * p + 2.0 * (n + a) * (n + b) * prev)
            / (s * (1.0 - x) * (1.0 + x));
        (p, dp)
    }

    /// The k-th root from the top (k = 1 is the largest), by Newton's method
    /// from the asymptotic guess cos((k + α/2 - ¼)π / (n + (α+β+1)/2)),
    /// deflated by the roots already `known` so that it cannot land on one of
    /// them, then polished by undeflated Newton steps.
    fn root(&self, k: usize, known: &[f64]) -> f64 {
        let (a, b) = (self.alpha, self.beta);
        let theta = (k as f64 + 0.5 * a - 0.25) * PI / (self.n as f64 + 0.5 * (a + b + 1.0));
        let mut x = theta.cos();
        for _ in 0..100 {
            let (p, dp) = self.eval(x);
            let pull: f64 = known.iter().map(|&r| 1.0 / (x - r)).sum();
            let step = p / (dp - p * pull);
            x = (x - step).clamp(-1.0 + f64::EPSILON, 1.0 - f64::EPSILON);
            if step.abs() <= 4.0 * f64::EPSILON {
                break;
            }
        }
        for _ in 0..2 {
            let (p, dp) = self.eval(x);
            let step = p / dp;
            if step.is_finite() && step.abs() < 1e-8 {
                x -= step;
            }
        }
        x
    }

    /// 1 / ((1 - x²) P_n'(x)²): the Gauss weight at a root up to a factor
    /// common to all nodes.
    fn raw_weight(&self, x: f64) -> f64 {
        let (_, dp) = self.eval(x);
        1.0 / ((1.0 - x) * (1.0 + x) * dp * dp)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// m_j = ∫_{-1}^{1} (1 - x)^α (1 + x)^β x^j dx for j < count, from m_0
    /// and the recurrence (α + β + 2 + j) m_{j+1} = (β - α) m_j + j m_{j-1},
    /// which is ∫ d/dx[(1 - x)^{α+1} (1 + x)^{β+1} x^j] dx = 0 (derived).
    fn exact_moments(alpha: f64, beta: f64, count: usize) -> Vec<f64> {
        let mut m = vec![zeroth_moment(alpha, beta)];
        for j in 0..count.saturating_sub(1) {
            let before = if j == 0 { 0.0 } else { m[j - 1] };
            let next =
                ((beta - alpha) * m[j] + j as f64 * before) / (alpha + beta + 2.0 + j as f64);
            m.push(next);
        }
        m
    }

    #[test]
    fn gauss_jacobi_is_exact_to_degree_2n_minus_1() {
        let exponents = [
            (0.0, 0.0),
            (0.5, 0.5),
            (1.0, 1.0),
            (1.5, 1.5),
            (-0.5, -0.5),
            (-0.5, 0.0),
            (0.0, 1.0),
            (0.5, 0.0),
            (0.0, 4.0),
            (1.5, 0.0),
        ];
        for (alpha, beta) in exponents {
            for n in 1..=12 {
                let rule = gauss_jacobi(n, alpha, beta);
                assert_eq!(rule.len(), n);
                assert!(rule.nodes.windows(2).all(|w| w[0] < w[1]));
                assert!(rule.nodes.iter().all(|x| x.abs() < 1.0));
                assert!(rule.weights.iter().all(|&w| w > 0.0));
                let moments = exact_moments(alpha, beta, 2 * n);
                for (j, &want) in moments.iter().enumerate() {
                    let got = rule.sum(|x| x.powi(j as i32));
                    let scale = zeroth_moment(alpha, beta);
                    assert!(
                        (got - want).abs() <= 1e-13 * scale,
                        "α = {alpha}, β = {beta}, n = {n}, x^{j}: {got} vs {want}"
                    );
                }
            }
        }
    }

    #[test]
    fn large_rules_have_distinct_roots_and_the_right_total() {
        for (alpha, beta) in [(0.0, 0.0), (0.5, 0.5), (1.5, 0.0), (0.0, 4.0)] {
            for n in [64, 200, 1000] {
                let rule = gauss_jacobi(n, alpha, beta);
                assert!(rule.nodes.windows(2).all(|w| w[0] < w[1]), "n = {n}");
                let total: f64 = rule.weights.iter().sum();
                assert!((total - zeroth_moment(alpha, beta)).abs() < 1e-13);
                // ∫ x² against Legendre: 2/3.
                if alpha == 0.0 && beta == 0.0 {
                    assert!((rule.sum(|x| x * x) - 2.0 / 3.0).abs() < 1e-14);
                }
            }
        }
    }

    #[test]
    fn legendre_matches_known_values() {
        // Three-point rule: ±√(3/5) with weight 5/9, 0 with 8/9 (common practice).
        let rule = gauss_legendre(3);
        let r = (0.6f64).sqrt();
        assert!((rule.nodes[0] + r).abs() < 1e-15 && (rule.nodes[2] - r).abs() < 1e-15);
        assert_eq!(rule.nodes[1], 0.0);
        assert!((rule.weights[0] - 5.0 / 9.0).abs() < 1e-15);
        assert!((rule.weights[1] - 8.0 / 9.0).abs() < 1e-15);
    }

    #[test]
    fn gamma_at_half_integers() {
        assert_eq!(gamma_half(1.0), 1.0);
        assert_eq!(gamma_half(4.0), 6.0);
        assert!((gamma_half(2.5) - 0.75 * PI.sqrt()).abs() < 1e-15);
    }
}
