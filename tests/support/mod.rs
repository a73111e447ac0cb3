//! Numerical helpers for the soundness tests: a seeded PRNG, Gauss–Legendre
//! nodes, quadrature over the unit sphere S^{k-1} ⊂ R^k (k = 2, 3, 4) and over
//! a boundary plane R^{d-1}. Nothing here knows about wardsmith.

#![allow(dead_code)]

use std::f64::consts::PI;

/// A point of R^d, d ≤ 4; unused trailing entries are zero.
pub type Vec4 = [f64; 4];

/// splitmix64 (Steele, Lea & Flood 2014): a tiny, seeded, portable PRNG.
pub struct SplitMix64(u64);

impl SplitMix64 {
    pub fn new(seed: u64) -> SplitMix64 {
        SplitMix64(seed)
    }

    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// Uniform in [lo, hi).
    pub fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        let unit = (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
        lo + (hi - lo) * unit
    }

    /// A point with each of its first d coordinates uniform in [lo, hi).
    pub fn point(&mut self, d: usize, lo: f64, hi: f64) -> Vec4 {
        let mut p = [0.0; 4];
        for c in p.iter_mut().take(d) {
            *c = self.uniform(lo, hi);
        }
        p
    }
}

pub fn sub(a: &Vec4, b: &Vec4) -> Vec4 {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2], a[3] - b[3]]
}

pub fn dot(a: &Vec4, b: &Vec4) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

pub fn norm(a: &Vec4) -> f64 {
    dot(a, a).sqrt()
}

/// a + s b
pub fn axpy(a: &Vec4, s: f64, b: &Vec4) -> Vec4 {
    [
        a[0] + s * b[0],
        a[1] + s * b[1],
        a[2] + s * b[2],
        a[3] + s * b[3],
    ]
}

/// Area of the unit sphere S^{d-1}: S_d = 2 π^{d/2} / Γ(d/2), by the
/// recursion S_{d+2} = 2π S_d / d from S_1 = 2, S_2 = 2π. (common practice)
pub fn sphere_area(d: usize) -> f64 {
    match d {
        1 => 2.0,
        2 => 2.0 * PI,
        _ => 2.0 * PI * sphere_area(d - 2) / (d - 2) as f64,
    }
}

/// Gauss–Legendre nodes and weights on [-1, 1], by Newton iteration on the
/// three-term recurrence of the Legendre polynomials.
pub fn gauss_legendre(n: usize) -> Vec<(f64, f64)> {
    let mut out = Vec::with_capacity(n);
    for i in 0..n {
        let mut x = (PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 0.0;
        for _ in 0..100 {
            let (mut p0, mut p1) = (1.0, x);
            for k in 2..=n {
                let p2 = ((2 * k - 1) as f64 * x * p1 - (k - 1) as f64 * p0) / k as f64;
                p0 = p1;
                p1 = p2;
            }
            // p1 = P_n(x), p0 = P_{n-1}(x)
            dp = n as f64 * (x * p1 - p0) / (x * x - 1.0);
            let step = p1 / dp;
            x -= step;
            if step.abs() < 1e-16 {
                break;
            }
        }
        out.push((x, 2.0 / ((1.0 - x * x) * dp * dp)));
    }
    out
}

/// Gauss–Legendre on [a, b].
pub fn gauss_legendre_on(n: usize, a: f64, b: f64) -> Vec<(f64, f64)> {
    let (mid, half) = (0.5 * (a + b), 0.5 * (b - a));
    gauss_legendre(n)
        .into_iter()
        .map(|(x, w)| (mid + half * x, half * w))
        .collect()
}

/// A quadrature rule on the unit sphere S^{k-1} ⊂ R^k, k = 2, 3 or 4: unit
/// vectors with weights summing to the area S_k. Smooth integrands converge
/// spectrally in `n` (Gauss–Legendre nodes) and `m` (trapezoid nodes).
///
/// - k = 2: trapezoid in the angle.
/// - k = 3: Gauss–Legendre in z = cos θ × trapezoid in φ.
/// - k = 4: Hopf coordinates (√(1-u) e^{iξ₁}, √u e^{iξ₂}), dS = ½ du dξ₁ dξ₂,
///   Gauss–Legendre in u ∈ [0, 1] × trapezoid in ξ₁ and ξ₂.
pub fn sphere_rule(k: usize, n: usize, m: usize) -> Vec<(Vec4, f64)> {
    let h = 2.0 * PI / m as f64;
    let angles: Vec<(f64, f64)> = (0..m)
        .map(|j| ((j as f64 * h).cos(), (j as f64 * h).sin()))
        .collect();
    let mut out = Vec::new();
    match k {
        2 => {
            for &(c, s) in &angles {
                out.push(([c, s, 0.0, 0.0], h));
            }
        }
        3 => {
            for (z, w) in gauss_legendre(n) {
                let rho = (1.0 - z * z).sqrt();
                for &(c, s) in &angles {
                    out.push(([rho * c, rho * s, z, 0.0], w * h));
                }
            }
        }
        4 => {
            for (u, w) in gauss_legendre_on(n, 0.0, 1.0) {
                let (a, b) = ((1.0 - u).sqrt(), u.sqrt());
                for &(c1, s1) in &angles {
                    for &(c2, s2) in &angles {
                        out.push(([a * c1, a * s1, b * c2, b * s2], 0.5 * w * h * h));
                    }
                }
            }
        }
        _ => panic!("sphere_rule: k = {k} is not 2, 3 or 4"),
    }
    out
}

/// ∫_{R^{d-1}} f(s) d^{d-1}s over the boundary plane y = 0 of R^d, in polar
/// coordinates about `center` (a point with y = 0), with ρ = scale · tan θ,
/// θ ∈ [0, π/2), Gauss–Legendre in θ. `f` gets the point s ∈ R^d with
/// s_{d-1} = 0. Meant for integrands that fall like ρ^{-2d} or faster.
pub fn plane_integral(
    d: usize,
    center: &Vec4,
    scale: f64,
    n: usize,
    m: usize,
    f: impl Fn(&Vec4) -> f64,
) -> f64 {
    let directions = sphere_rule(d - 1, n, m);
    let mut total = 0.0;
    for (theta, wt) in gauss_legendre_on(n, 0.0, 0.5 * PI) {
        let rho = scale * theta.tan();
        let jacobian = scale / (theta.cos() * theta.cos()) * rho.powi(d as i32 - 2);
        for (omega, wo) in &directions {
            let s = axpy(center, rho, omega);
            debug_assert!(s[d - 1] == 0.0);
            total += wt * wo * jacobian * f(&s);
        }
    }
    total
}
