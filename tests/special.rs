//! Special functions for conformal blocks (`numeric::special`): Γ, ψ, the
//! Gauss hypergeometric function ₂F₁ on the whole real axis, and the blocks
//! of a bulk two-point function near a flat wall.
//!
//! Sources beside each check. DLMF = NIST Digital Library of Mathematical
//! Functions (ch. 5 gamma, ch. 15 hypergeometric, ch. 18 orthogonal
//! polynomials, ch. 19 elliptic integrals); A&S = Abramowitz & Stegun,
//! Handbook of Mathematical Functions (1964), ch. 15. Equation numbers are
//! recalled (from memory), not re-read; every closed form here was also
//! confirmed with mpmath 1.3.0 (a general-purpose arbitrary-precision
//! library) before it was written down. The reference values in the tables
//! marked "mpmath" were computed with it at 40 digits from the exact double
//! arguments shown.
//!
//! Independent of any formula, ₂F₁ is also compared with its defining
//! series summed in exact fixed-point arithmetic (num-bigint) wherever the
//! series converges.

// Reference values are quoted with the digits their source gives.
#![allow(clippy::excessive_precision)]

use std::f64::consts::{FRAC_PI_2, LN_2, PI};

use num_bigint::BigInt;
use num_traits::{Signed, ToPrimitive, Zero};
use wardsmith::diagnostic::{Error, ErrorKind};
use wardsmith::numeric::special::{
    boundary_block, bulk_block, digamma, gamma, hyp2f1, hyp2f1_regularized, hyp2f1_scale,
    hyp2f1_vanishing_bc, ln_gamma, rgamma, SpecialError,
};

/// The accuracy the module promises for moderate parameters.
const TOL: f64 = 1e-13;

/// Euler's constant γ (DLMF 5.2.3; common practice).
const EULER_GAMMA: f64 = 0.577_215_664_901_532_9;

#[track_caller]
fn close(got: f64, want: f64, tol: f64, what: &str) {
    let err = if want == 0.0 {
        got.abs()
    } else {
        ((got - want) / want).abs()
    };
    assert!(
        err <= tol,
        "{what}: got {got:e}, want {want:e}, relative error {err:e} > {tol:e}"
    );
}

/// |got - want| ≤ tol × scale: for a value that is the difference of
/// terms of size `scale`, where relative accuracy is not to be had.
#[track_caller]
fn close_to_scale(got: f64, want: f64, tol: f64, scale: f64, what: &str) {
    let err = (got - want).abs();
    assert!(
        err <= tol * scale,
        "{what}: got {got:e}, want {want:e}, error {err:e} > {tol:e} × {scale:e}"
    );
}

#[track_caller]
fn f(a: f64, b: f64, c: f64, z: f64) -> f64 {
    match hyp2f1(a, b, c, z) {
        Ok(v) => v,
        Err(e) => panic!("2F1({a}, {b}; {c}; {z}): {e}"),
    }
}

// ---------------------------------------------------------------- Γ and ψ

#[test]
fn gamma_at_whole_and_half_integers() {
    // DLMF 5.4.1: Γ(n + 1) = n!.
    let mut fact = 1.0;
    for n in 1..=25 {
        close(gamma(n as f64).unwrap(), fact, 1e-15, "Γ(n) = (n-1)!");
        fact *= n as f64;
    }
    // DLMF 5.4.6: Γ(1/2) = √π; Γ(n + 1/2) = (2n)! √π/(4^n n!) (DLMF 5.5.5 at x = n + 1/2).
    close(gamma(0.5).unwrap(), PI.sqrt(), 1e-15, "Γ(1/2)");
    close(
        gamma(4.5).unwrap(),
        40320.0 * PI.sqrt() / (256.0 * 24.0),
        1e-15,
        "Γ(9/2)",
    );
    // Reflection, DLMF 5.5.3 at x = 1/2 + n: Γ(-1/2) = -2√π, Γ(-3/2) = 4√π/3.
    close(gamma(-0.5).unwrap(), -2.0 * PI.sqrt(), 1e-15, "Γ(-1/2)");
    close(
        gamma(-1.5).unwrap(),
        4.0 * PI.sqrt() / 3.0,
        1e-15,
        "Γ(-3/2)",
    );
}

#[test]
fn gamma_at_thirds_and_quarters() {
    // DLMF §5.4(iii) (from memory; confirmed with mpmath):
    // Γ(1/3) = 2.67893 85347 07747 63365…, Γ(1/4) = 3.62560 99082 21908 31193….
    close(
        gamma(1.0 / 3.0).unwrap(),
        2.678_938_534_707_747_6,
        1e-15,
        "Γ(1/3)",
    );
    close(
        gamma(0.25).unwrap(),
        3.625_609_908_221_908_3,
        1e-15,
        "Γ(1/4)",
    );
    // DLMF 5.5.5 (duplication): Γ(2x) = π^(-1/2) 2^(2x-1) Γ(x) Γ(x + 1/2).
    for &x in &[0.3, 1.7, 6.25, 17.5, -2.3] {
        let lhs = gamma(2.0 * x).unwrap();
        let rhs =
            2f64.powf(2.0 * x - 1.0) * gamma(x).unwrap() * gamma(x + 0.5).unwrap() / PI.sqrt();
        close(lhs, rhs, 1e-14, "duplication");
    }
    // DLMF 5.5.3 (reflection) away from half-integers.
    // sin πx is taken at the exact r = x, 1 - x or x - 2 closest to 0.
    for &(x, r) in &[
        (0.1f64, 0.1),
        (0.37, 0.37),
        (0.999, 1.0 - 0.999),
        (2.2, 2.2 - 2.0),
    ] {
        let lhs = gamma(x).unwrap() * gamma(1.0 - x).unwrap();
        close(lhs, PI / (PI * r).sin(), 1e-14, "reflection");
    }
}

#[test]
fn log_gamma_and_reciprocal_gamma() {
    // ln Γ(101) = ln 100! = Σ ln k (DLMF 5.4.1).
    let sum: f64 = (1..=100).map(|k| (k as f64).ln()).sum();
    let (l, s) = ln_gamma(101.0).unwrap();
    close(l, sum, 1e-14, "ln Γ(101)");
    assert_eq!(s, 1.0);
    // Sign of Γ between -2 and -1 is positive, between -1 and 0 negative.
    assert_eq!(ln_gamma(-1.5).unwrap().1, 1.0);
    assert_eq!(ln_gamma(-0.5).unwrap().1, -1.0);
    close(
        ln_gamma(-0.5).unwrap().0,
        (2.0 * PI.sqrt()).ln(),
        1e-15,
        "ln|Γ(-1/2)|",
    );
    // 1/Γ is entire: zero at the poles (DLMF 5.2.1).
    assert_eq!(rgamma(0.0), 0.0);
    assert_eq!(rgamma(-7.0), 0.0);
    close(rgamma(0.5), 1.0 / PI.sqrt(), 1e-15, "1/Γ(1/2)");
    // Beyond the range of Γ, ln Γ still works: Stirling, DLMF 5.11.1 to two terms.
    let x: f64 = 1000.5;
    let stirling = (x - 0.5) * x.ln() - x + 0.5 * (2.0 * PI).ln() + 1.0 / (12.0 * x)
        - 1.0 / (360.0 * x.powi(3));
    close(ln_gamma(x).unwrap().0, stirling, 1e-15, "ln Γ(1000.5)");
}

#[test]
fn digamma_values() {
    // DLMF 5.4.12: ψ(1) = -γ; 5.4.13: ψ(1/2) = -γ - 2 ln 2; 5.4.14: ψ(n + 1) = H_n - γ.
    close(digamma(1.0).unwrap(), -EULER_GAMMA, 1e-15, "ψ(1)");
    close(
        digamma(0.5).unwrap(),
        -EULER_GAMMA - 2.0 * LN_2,
        1e-15,
        "ψ(1/2)",
    );
    let mut h = 0.0;
    for n in 1..=30 {
        h += 1.0 / n as f64;
        close(
            digamma(n as f64 + 1.0).unwrap(),
            h - EULER_GAMMA,
            1e-15,
            "ψ(n+1)",
        );
    }
    // DLMF 5.5.4 (reflection): ψ(1 - x) - ψ(x) = π cot(πx).
    for &x in &[0.2, -1.3, -7.75] {
        let lhs = digamma(1.0 - x).unwrap() - digamma(x).unwrap();
        close(lhs, PI / (PI * x).tan(), 1e-14, "ψ reflection");
    }
}

#[test]
fn gamma_errors_are_typed() {
    assert_eq!(gamma(0.0), Err(SpecialError::GammaPole));
    assert_eq!(gamma(-3.0), Err(SpecialError::GammaPole));
    assert_eq!(digamma(-2.0), Err(SpecialError::GammaPole));
    assert_eq!(ln_gamma(-4.0), Err(SpecialError::GammaPole));
    assert_eq!(gamma(200.0), Err(SpecialError::Overflow));
    assert_eq!(gamma(f64::NAN), Err(SpecialError::NotFinite));
}

// ------------------------------------------------- ₂F₁: special values

#[test]
fn logarithm_and_inverse_trigonometric_cases() {
    // DLMF 15.4.1 / A&S 15.1.3: F(1, 1; 2; z) = -ln(1 - z)/z. The connection
    // formula here is the logarithmic case c - a - b = 0.
    for &z in &[0.3, -0.5, 0.75, 0.999, 1.0 - 1e-8, -3.0, -1e6] {
        close(f(1.0, 1.0, 2.0, z), -(-z).ln_1p() / z, TOL, "15.4.1");
    }
    // DLMF 15.4.2 / A&S 15.1.4: F(1/2, 1; 3/2; z²) = artanh(z)/z (c - a - b = 0).
    // x = 1 - 2^-13 has an exact square, 2^-12 from 1.
    for &x in &[0.5, 0.9, 1.0 - 2f64.powi(-13)] {
        close(f(0.5, 1.0, 1.5, x * x), x.atanh() / x, TOL, "15.4.2");
    }
    // DLMF 15.4.3 / A&S 15.1.5: F(1/2, 1; 3/2; -z²) = arctan(z)/z; z → -∞.
    for &x in &[0.5, 3.0, 1000.0] {
        close(f(0.5, 1.0, 1.5, -x * x), x.atan() / x, TOL, "15.4.3");
    }
    // DLMF 15.4.4 / A&S 15.1.6: F(1/2, 1/2; 3/2; z²) = arcsin(z)/z.
    for &x in &[0.6, 0.99] {
        close(f(0.5, 0.5, 1.5, x * x), x.asin() / x, TOL, "15.4.4");
    }
    // DLMF 15.4.5 / A&S 15.1.7: F(1/2, 1/2; 3/2; -z²) = arsinh(z)/z (b - a = 0 at z < -1).
    for &x in &[2.0, 1000.0] {
        close(f(0.5, 0.5, 1.5, -x * x), x.asinh() / x, TOL, "15.4.5");
    }
}

#[test]
fn binomial_and_quadratic_cases() {
    // DLMF 15.4.6 / A&S 15.1.8: F(a, b; b; z) = (1 - z)^(-a).
    close(f(0.7, 2.3, 2.3, -40.0), 41f64.powf(-0.7), TOL, "15.4.6");
    let z = 1.0 - 2f64.powi(-27);
    close(f(2.0, 0.3, 0.3, z), 2f64.powi(54), TOL, "15.4.6 near 1");
    let a = 0.3;
    let x: f64 = 0.8;
    // DLMF 15.4.7: F(a, 1/2 + a; 1/2; z²) = ((1 + z)^(-2a) + (1 - z)^(-2a))/2.
    let want = ((1.0 + x).powf(-2.0 * a) + (1.0 - x).powf(-2.0 * a)) / 2.0;
    close(f(a, 0.5 + a, 0.5, x * x), want, TOL, "15.4.7");
    // DLMF 15.4.8: F(a, 1/2 + a; 1/2; -z²) = (1 + z²)^(-a) cos(2a arctan z).
    let x: f64 = 2.0;
    let want = (1.0 + x * x).powf(-0.7) * (1.4 * x.atan()).cos();
    close(f(0.7, 1.2, 0.5, -x * x), want, TOL, "15.4.8");
    // DLMF 15.4.9: F(a, 1/2 + a; 3/2; z²) = ((1 + z)^(1-2a) - (1 - z)^(1-2a))/(2z(1 - 2a)).
    let x: f64 = 0.95;
    let want = ((1.0 + x).powf(1.0 - 2.0 * a) - (1.0 - x).powf(1.0 - 2.0 * a))
        / (2.0 * x * (1.0 - 2.0 * a));
    close(f(a, 0.5 + a, 1.5, x * x), want, TOL, "15.4.9");
    // DLMF 15.4.10: F(a, 1/2 + a; 3/2; -z²) = (1 + z²)^(1/2-a) sin((1 - 2a) arctan z)/((1 - 2a) z).
    for &x in &[0.6f64, 4.0, 300.0] {
        let want = (1.0 + x * x).powf(0.5 - a) * ((1.0 - 2.0 * a) * x.atan()).sin()
            / ((1.0 - 2.0 * a) * x);
        close(f(a, 0.5 + a, 1.5, -x * x), want, TOL, "15.4.10");
    }
    // DLMF 15.4.11: F(-a, a; 1/2; -z²) = ((√(1+z²) + z)^(2a) + (√(1+z²) - z)^(2a))/2.
    let x: f64 = 1.5;
    let r = (1.0 + x * x).sqrt();
    let want = ((r + x).powf(2.0 * a) + (r - x).powf(2.0 * a)) / 2.0;
    close(f(-a, a, 0.5, -x * x), want, TOL, "15.4.11");
    // DLMF 15.4.12: F(a, 1 - a; 1/2; -z²) = ((√(1+z²) + z)^(2a-1) + (√(1+z²) - z)^(2a-1))/(2√(1+z²)).
    let want = ((r + x).powf(2.0 * a - 1.0) + (r - x).powf(2.0 * a - 1.0)) / (2.0 * r);
    close(f(a, 1.0 - a, 0.5, -x * x), want, TOL, "15.4.12");
    // DLMF 15.4.13 / A&S 15.1.13: F(a, 1/2 + a; 1 + 2a; z) = (1/2 + √(1 - z)/2)^(-2a).
    for &z in &[0.95f64, -20.0, 1.0 - 1e-8] {
        let want = (0.5 + 0.5 * (1.0 - z).sqrt()).powf(-2.0 * a);
        close(f(a, 0.5 + a, 1.0 + 2.0 * a, z), want, TOL, "15.4.13");
    }
    // DLMF 15.4.14 / A&S 15.1.14: F(a, 1/2 + a; 2a; z) = (1 - z)^(-1/2) (1/2 + √(1 - z)/2)^(1-2a).
    for &z in &[0.9f64, -5.0] {
        let want = (1.0 - z).powf(-0.5) * (0.5 + 0.5 * (1.0 - z).sqrt()).powf(1.0 - 2.0 * a);
        close(f(a, 0.5 + a, 2.0 * a, z), want, TOL, "15.4.14");
    }
}

#[test]
fn trigonometric_cases() {
    let a = 0.3;
    let t: f64 = 0.7;
    let s2 = t.sin().powi(2);
    // A&S 15.1.15: F(a, 1 - a; 3/2; sin² t) = sin((2a - 1)t)/((2a - 1) sin t).
    let want = ((2.0 * a - 1.0) * t).sin() / ((2.0 * a - 1.0) * t.sin());
    close(f(a, 1.0 - a, 1.5, s2), want, TOL, "A&S 15.1.15");
    // A&S 15.1.17: F(-a, a; 1/2; sin² t) = cos(2at).
    close(f(-a, a, 0.5, s2), (2.0 * a * t).cos(), TOL, "A&S 15.1.17");
    // A&S 15.1.18: F(a, 1 - a; 1/2; sin² t) = cos((2a - 1)t)/cos t; near t = π/2, z near 1.
    for &t in &[0.7f64, 1.5] {
        let want = ((2.0 * a - 1.0) * t).cos() / t.cos();
        close(
            f(a, 1.0 - a, 0.5, t.sin().powi(2)),
            want,
            TOL,
            "A&S 15.1.18",
        );
    }
}

#[test]
fn sums_at_one_minus_one_and_one_half() {
    // DLMF 15.4.20 (Gauss): F(a, b; c; 1) = Γ(c)Γ(c-a-b)/(Γ(c-a)Γ(c-b)), c - a - b > 0.
    close(
        f(0.5, 0.5, 2.0, 1.0),
        4.0 / PI,
        TOL,
        "15.4.20, Γ(2)Γ(1)/Γ(3/2)²",
    );
    close(f(1.0, 1.0, 3.0, 1.0), 2.0, TOL, "15.4.20, Γ(3)Γ(1)/Γ(2)²");
    close(
        f(-0.5, -0.5, 1.0, 1.0),
        4.0 / PI,
        TOL,
        "15.4.20, Γ(1)Γ(2)/Γ(3/2)²",
    );
    // DLMF 15.4.24 (Chu–Vandermonde): F(-n, b; c; 1) = (c - b)_n/(c)_n.
    let (b, c) = (0.3, 2.7);
    let want: f64 = (0..5)
        .map(|j| (c - b + j as f64) / (c + j as f64))
        .product();
    close(f(-5.0, b, c, 1.0), want, TOL, "15.4.24");
    // DLMF 15.4.26 (Kummer): F(a, b; a - b + 1; -1) = Γ(a-b+1)Γ(a/2+1)/(Γ(a+1)Γ(a/2-b+1)).
    // a = 2, b = 1/2: Γ(5/2)Γ(2)/(Γ(3)Γ(3/2)) = 3/4.
    close(f(2.0, 0.5, 2.5, -1.0), 0.75, TOL, "15.4.26");
    let (a, b) = (1.5, 0.25);
    let want = gamma(a - b + 1.0).unwrap() * gamma(a / 2.0 + 1.0).unwrap()
        / (gamma(a + 1.0).unwrap() * gamma(a / 2.0 - b + 1.0).unwrap());
    close(f(a, b, a - b + 1.0, -1.0), want, TOL, "15.4.26");
    // DLMF §15.4(iii) (Gauss's second sum): F(a, b; (a+b+1)/2; 1/2) =
    // √π Γ((a+b+1)/2)/(Γ((a+1)/2)Γ((b+1)/2)); at a = b = 1 it is π/2.
    close(f(1.0, 1.0, 1.5, 0.5), FRAC_PI_2, TOL, "Gauss's second sum");
    let (a, b) = (0.3, 1.2);
    let want = PI.sqrt() * gamma((a + b + 1.0) / 2.0).unwrap()
        / (gamma((a + 1.0) / 2.0).unwrap() * gamma((b + 1.0) / 2.0).unwrap());
    close(
        f(a, b, (a + b + 1.0) / 2.0, 0.5),
        want,
        TOL,
        "Gauss's second sum",
    );
    // DLMF §15.4(iii) (Bailey's sum): F(a, 1 - a; c; 1/2) =
    // 2^(1-c) √π Γ(c)/(Γ((a+c)/2)Γ((1-a+c)/2)).
    let (a, c) = (0.3, 1.7);
    let want = 2f64.powf(1.0 - c) * PI.sqrt() * gamma(c).unwrap()
        / (gamma((a + c) / 2.0).unwrap() * gamma((1.0 - a + c) / 2.0).unwrap());
    close(f(a, 1.0 - a, c, 0.5), want, TOL, "Bailey's sum");
}

/// The arithmetic-geometric mean with the sums for K and E: K(k) =
/// π/(2 M(1, k')), E(k) = K(k) (1 - Σ_n 2^(n-1) c_n²), c_0 = k, for
/// k² = m < 1 (DLMF 19.8.5, 19.8.6; from memory). Independent of ₂F₁.
fn agm_k_e(m: f64) -> (f64, f64) {
    let (mut a, mut g) = (1.0, (1.0 - m).sqrt());
    let mut sum = 0.5 * m; // 2^(-1) c_0²
    let mut pow = 0.5;
    for _ in 0..60 {
        let c = 0.5 * (a - g);
        let (an, gn) = (0.5 * (a + g), (a * g).sqrt());
        pow *= 2.0;
        sum += pow * c * c;
        a = an;
        g = gn;
        if c.abs() < 1e-17 * a {
            break;
        }
    }
    let k = PI / (2.0 * a);
    (k, k * (1.0 - sum))
}

#[test]
fn complete_elliptic_integrals_against_the_agm() {
    // DLMF 19.5.1: K(k) = (π/2) F(1/2, 1/2; 1; k²), integer c and c - a - b = 0.
    // DLMF 19.5.2: E(k) = (π/2) F(-1/2, 1/2; 1; k²), c - a - b = 1.
    // k² < 0 is an imaginary modulus; the AGM formulas hold for every m < 1.
    for &m in &[0.5, 0.9, 0.99, 1.0 - 1e-8, 1.0 - 1e-14, -3.0, -1e6] {
        let (k, e) = agm_k_e(m);
        close(FRAC_PI_2 * f(0.5, 0.5, 1.0, m), k, TOL, "K by the AGM");
        close(FRAC_PI_2 * f(-0.5, 0.5, 1.0, m), e, TOL, "E by the AGM");
    }
}

#[test]
fn logarithmic_cases_with_c_minus_a_minus_b_two_and_minus_one() {
    // F(1, 1; 4; z) = 3 Σ (1/(k+1) - 2/(k+2) + 1/(k+3)) z^k (derived: partial
    // fractions of the defining series, then ln(1 - z) = -Σ z^j/j), c - a - b = 2.
    let l1 = |z: f64| -(-z).ln_1p() / z;
    let l2 = |z: f64| (-(-z).ln_1p() - z) / (z * z);
    let l3 = |z: f64| (-(-z).ln_1p() - z - z * z / 2.0) / (z * z * z);
    for &z in &[0.9, 0.999] {
        let want = 3.0 * (l1(z) - 2.0 * l2(z) + l3(z));
        close(f(1.0, 1.0, 4.0, z), want, 1e-12, "F(1, 1; 4; z)");
    }
    // F(2, 2; 3; z) = 2 d/dz F(1, 1; 2; z) (DLMF 15.5.1 with 15.4.1)
    // = 2 (1/(z(1 - z)) + ln(1 - z)/z²), c - a - b = -1.
    for &z in &[0.75f64, 0.999, 1.0 - 1e-8, -2.0, -1e5] {
        let want = 2.0 * (1.0 / (z * (1.0 - z)) + (-z).ln_1p() / (z * z));
        close(f(2.0, 2.0, 3.0, z), want, 1e-12, "F(2, 2; 3; z)");
    }
}

#[test]
fn polynomials_on_the_whole_axis() {
    // Chebyshev: T_n(x) = F(-n, n; 1/2; (1 - x)/2) (DLMF §18.5(iii)), and
    // T_n(cos θ) = cos nθ, T_n(cosh t) = cosh nt, T_n(-x) = (-1)^n T_n(x)
    // (DLMF 18.5.1 and its continuation; common practice). z = (1 - x)/2 runs
    // past 1 for x < -1, where only a polynomial is real.
    for n in [3u32, 7, 12] {
        let nf = n as f64;
        for &x in &[0.3f64, -0.9, 3.0, -3.0] {
            let want = if x.abs() <= 1.0 {
                (nf * x.acos()).cos()
            } else {
                let sign = if x < 0.0 && n % 2 == 1 { -1.0 } else { 1.0 };
                sign * (nf * x.abs().acosh()).cosh()
            };
            close(
                f(-nf, nf, 0.5, (1.0 - x) / 2.0),
                want,
                1e-12,
                "Chebyshev T_n",
            );
        }
    }
    // Legendre: P_n(x) = F(-n, n + 1; 1; (1 - x)/2) (DLMF §18.5(iii)) against
    // Bonnet's recurrence (n+1)P_{n+1} = (2n+1)x P_n - n P_{n-1} (common practice).
    // Inside [-1, 1] every hypergeometric sum of a high-degree Legendre
    // polynomial cancels; the contiguous relation carries it (DLMF 15.5.11).
    for &x in &[0.4, -2.5, 5.0] {
        let (mut p0, mut p1) = (1.0, x);
        for n in 1..15 {
            let nf = n as f64;
            let p2 = ((2.0 * nf + 1.0) * x * p1 - nf * p0) / (nf + 1.0);
            p0 = p1;
            p1 = p2;
            let m = (n + 1) as f64;
            close(
                f(-m, m + 1.0, 1.0, (1.0 - x) / 2.0),
                p1,
                1e-12,
                "Legendre P_n",
            );
        }
    }
    // At degree 40 the recurrence's own bound on rounding growth is past
    // 1e5: refused rather than trusted.
    assert_eq!(
        hyp2f1(-40.0, 41.0, 1.0, 0.45),
        Err(SpecialError::Cancellation)
    );
    // With c = -m and a = -n, n ≤ m: the terminating sum (DLMF 15.2.6's
    // convention): F(-1, b; -2; z) = 1 + (-1) b z/(-2) = 1 + bz/2.
    close(
        f(-1.0, 3.0, -2.0, 0.8),
        1.0 + 3.0 * 0.8 / 2.0,
        TOL,
        "terminating at c = -2",
    );
}

// ------------------------------- ₂F₁ against its series and a reference

/// A dyadic rational n/2^k, exact in floating point.
#[derive(Clone, Copy)]
struct Dyadic(i64, u32);

impl Dyadic {
    fn f64(self) -> f64 {
        self.0 as f64 / (1u64 << self.1) as f64
    }
}

/// ₂F₁(a, b; c; z) by its defining series (DLMF 15.2.1) in fixed point
/// with 2^-256 units: a term is updated as t·N/D with N, D exact integers,
/// so each step truncates by at most one unit; the sum stops once the terms
/// have passed their largest and fallen below 2^-150, where for |z| ≤ 7/8
/// the rest is below 2^-145.
fn series_reference(a: Dyadic, b: Dyadic, c: Dyadic, z: Dyadic) -> f64 {
    const BITS: u32 = 256;
    let one = BigInt::from(1) << BITS;
    let small = BigInt::from(1) << (BITS - 150);
    let (mut t, mut s) = (one.clone(), one.clone());
    let p = |x: Dyadic| BigInt::from(x.0);
    let q = |x: Dyadic| BigInt::from(1) << x.1;
    let start = 4.0 * (a.f64().abs() + b.f64().abs() + c.f64().abs()) + 40.0;
    for j in 0..20_000i64 {
        let jb = BigInt::from(j);
        let num = (p(a) + &jb * q(a)) * (p(b) + &jb * q(b)) * p(z) * q(c);
        let den = q(a) * q(b) * q(z) * (p(c) + &jb * q(c)) * (&jb + 1);
        if num.is_zero() {
            break;
        }
        t = t * num / den;
        s += &t;
        if j as f64 > start && t.abs() < small {
            break;
        }
    }
    let top = (s >> (BITS - 64)).to_f64().expect("finite");
    top / 2f64.powi(64)
}

#[test]
fn agrees_with_the_defining_series_in_exact_arithmetic() {
    let d = |n: i64, k: u32| Dyadic(n, k);
    // (a, b, c): generic, c - a - b whole (2, 1, -2), c - a - b within 2^-20 of
    // a whole number, negative c, larger parameters.
    let params = [
        (d(5, 2), d(-7, 3), d(13, 4)),
        (d(1, 1), d(3, 1), d(4, 0)),
        (d(3, 2), d(5, 4), d(15, 4)),
        (d(9, 4), d(11, 4), d(3, 1)),
        (d(7, 4), d(5, 4), d((3 << 20) + 1, 20)),
        (d(3, 2), d(7, 4), d(-13, 4)),
        (d(25, 2), d(37, 4), d(161, 8)),
        (d(-11, 4), d(1, 3), d(9, 8)),
        // a within 2^-14 of -5: one term nearly vanishes, the series goes on.
        (d(-81_919, 14), d(1, 0), d(3, 1)),
    ];
    let zs = [
        d(-7, 3),
        d(-1, 1),
        d(-1, 2),
        d(1, 4),
        d(1, 1),
        d(5, 3),
        d(3, 2),
        d(7, 3),
    ];
    for &(a, b, c) in &params {
        for &z in &zs {
            let want = series_reference(a, b, c, z);
            let (af, bf, cf, zf) = (a.f64(), b.f64(), c.f64(), z.f64());
            let (got, scale) = hyp2f1_scale(af, bf, cf, zf).unwrap();
            // Relative to the value, and to the scale of the terms where the
            // function itself is the difference of larger ones.
            let err = (got - want).abs();
            assert!(
                err <= TOL * want.abs() || err <= 1e-15 * scale,
                "2F1({af}, {bf}; {cf}; {zf}) = {got:e}, series {want:e}, scale {scale:e}"
            );
        }
    }
}

/// ₂F₁ at arguments where no closed form is at hand: mpmath 1.3.0,
/// `mp.hyp2f1` at 40 digits, arguments the exact doubles shown.
const MPMATH_2F1: [(f64, f64, f64, f64, f64); 15] = [
    (0.75, 1.25, 2.0000000009313226, 0.999, 6.3680675876337216815),
    (
        0.75,
        1.25,
        1.9999990463256836,
        -40.0,
        0.11355115589772335056,
    ),
    (1.5, 1.5000000298023224, 3.0, -7.5, 0.14740643234690584037),
    (2.25, 3.5, 6.75, 0.9375, 7.9566605991555068903),
    (2.25, 3.5, 4.75, 0.9375, 50.510777777113177709),
    (0.5, 2.5, 1.0, 0.875, 30.166466736714258593),
    (3.125, -2.375, 1.5, -1000.0, 53540395.578504541628),
    (-3.625, 2.875, -1.25, 0.71875, -24.297865860819117767),
    (12.5, 9.25, 20.125, -0.625, 0.053894375652241259636),
    (12.5, 9.25, 20.125, 0.96875, 1045821.0909913704331),
    (12.5, 12.5, 22.0, -250.0, 1.8000526115126126718e-24),
    (21.0, 19.5, 39.0, -3.0, 5.1507111613299390252e-8),
    (0.5, 0.5, 1.0, 0.9999999999990905, 9.7079664067187326949),
    (1.0, 2.0, 0.5, -100000000.0, -5.0000012855230996173e-9),
    (4.5, 1.0, 5.5, 0.5009765625, 1.719927854836616236),
];

#[test]
fn agrees_with_an_arbitrary_precision_library() {
    for &(a, b, c, z, want) in &MPMATH_2F1 {
        close(
            f(a, b, c, z),
            want,
            TOL,
            &format!("mpmath 2F1({a}, {b}; {c}; {z})"),
        );
    }
}

// ------------------------------- degenerate limits and the regularised ₂F₁

#[test]
fn limit_as_b_and_c_vanish_together() {
    // lim_{t→0} F(a, r t; t; z) = 1 - r + r (1 - z)^(-a) (derived in the
    // module doc from the series, with DLMF 15.4.6).
    for &(a, z) in &[(0.5, -3.0f64), (1.5, 0.6), (2.0, -0.2), (0.25, -1e4)] {
        let want = 0.5 * (1.0 + (1.0 - z).powf(-a));
        close(
            hyp2f1_vanishing_bc(a, 0.5, z).unwrap(),
            want,
            1e-15,
            "closed form",
        );
        // Approached along b = c/2 = ε, the function differs by O(ε).
        for &eps in &[1e-7, -1e-7] {
            let near = f(a, eps, 2.0 * eps, z);
            close(near, want, 1e-6, "F(a, ε; 2ε; z) → limit");
        }
        let r = 0.3;
        close(
            f(a, r * 1e-8, 1e-8, z),
            hyp2f1_vanishing_bc(a, r, z).unwrap(),
            1e-7,
            "F(a, rε; ε; z) → limit",
        );
    }
    // By DLMF 15.2.6's convention the function itself at b = c = 0 is 1.
    assert_eq!(hyp2f1(0.7, 0.0, 0.0, 0.5), Ok(1.0));
    assert_eq!(
        hyp2f1_vanishing_bc(1.0, 0.5, 1.0),
        Err(SpecialError::Divergent)
    );
    // A whole a keeps the limit real past z = 1.
    close(
        hyp2f1_vanishing_bc(2.0, 0.5, 3.0).unwrap(),
        0.5 * (1.0 + 0.25),
        1e-15,
        "z > 1",
    );
}

#[test]
fn regularised_function_is_continuous_in_c() {
    // DLMF §15.2(ii): at c = -m, F/Γ(c) = (a)_{m+1}(b)_{m+1}/(m+1)! z^{m+1}
    // F(a+m+1, b+m+1; m+2; z); for a = b = 1, m = 1: 2z²/(1 - z)³ (with 15.4.6).
    let z = 0.6;
    let want = 2.0 * z * z / (1.0f64 - z).powi(3);
    close(
        hyp2f1_regularized(1.0, 1.0, -1.0, z).unwrap(),
        want,
        TOL,
        "15.2(ii)",
    );
    // The limit from both sides of the pole (O(δ) away).
    for &delta in &[1e-8, -1e-8] {
        let near = hyp2f1_regularized(1.0, 1.0, -1.0 + delta, z).unwrap();
        close(near, want, 1e-6, "continuity at c = -1");
    }
    // Away from poles it is F·(1/Γ(c)).
    close(
        hyp2f1_regularized(0.5, 0.5, 1.0, 0.5).unwrap(),
        f(0.5, 0.5, 1.0, 0.5),
        1e-15,
        "Γ(1) = 1",
    );
    // A terminating numerator before the pole gives 0.
    assert_eq!(hyp2f1_regularized(-1.0, 2.0, -3.0, 0.4), Ok(0.0));
}

// ------------------------------------------------------------ errors

#[test]
fn undefined_values_are_errors() {
    // c a pole with no cancelling numerator (DLMF 15.2.1 has a zero denominator).
    assert_eq!(
        hyp2f1(1.0, 1.0, -2.0, 0.3),
        Err(SpecialError::ParameterPole)
    );
    assert_eq!(
        hyp2f1(-2.0, 1.0, -1.0, 0.3),
        Err(SpecialError::ParameterPole)
    );
    // On the branch cut.
    assert_eq!(hyp2f1(0.5, 1.0, 1.5, 1.5), Err(SpecialError::BranchCut));
    // Divergent at z = 1: c - a - b = 0 (DLMF 15.4.21) and < 0 (15.4.23).
    assert_eq!(hyp2f1(1.0, 1.0, 2.0, 1.0), Err(SpecialError::Divergent));
    assert_eq!(hyp2f1(1.0, 2.0, 2.5, 1.0), Err(SpecialError::Divergent));
    // Not a number.
    assert_eq!(
        hyp2f1(f64::NAN, 1.0, 2.0, 0.5),
        Err(SpecialError::NotFinite)
    );
    assert_eq!(
        hyp2f1(1.0, 1.0, 2.0, f64::NEG_INFINITY),
        Err(SpecialError::NotFinite)
    );
    // Beyond floating point: F(25.6, 27.2; 2.4; 1 - 1e-8) ≈ 2e414 (mpmath).
    assert_eq!(
        hyp2f1(25.58, 27.16, 2.445, 1.0 - 1e-8),
        Err(SpecialError::Overflow)
    );
    // Large a, b beside a small c at z < 0: the function oscillates and is
    // some 1e9 times smaller than every expansion's terms; refused rather
    // than returned with half its digits wrong.
    assert_eq!(
        hyp2f1(
            28.016763251737792,
            18.95811199203814,
            3.8630802585312005,
            -1.5
        ),
        Err(SpecialError::Cancellation)
    );
    // The error joins the project's diagnostics as a numeric error.
    let e: Error = SpecialError::BranchCut.into();
    assert_eq!(e.kind, ErrorKind::Numeric);
    assert!(e.message.contains("branch cut"), "{}", e.message);
}

// ------------------------------------------------------------ blocks

/// G(ξ) of the free scalar with a wall, C_φ = 1: 1 ± (ξ/(1 + ξ))^(d/2-1)
/// (derived: image propagator, docs/conventions.md §4 and §8).
fn free_scalar(d: f64, xi: f64, sign: f64) -> f64 {
    1.0 + sign * (xi / (1.0 + xi)).powf(d / 2.0 - 1.0)
}

const XIS: [f64; 7] = [1e-4, 0.01, 0.3, 1.0, 2.5, 40.0, 1e5];

#[test]
fn free_scalar_in_the_bulk_channel() {
    // G = 1 ± f_bulk(d - 2; ξ): the identity and φ² with λa = ±1 (derived,
    // the block conventions of src/numeric/special/blocks.rs; McAvity & Osborn 1995, Liendo, Rastelli & van Rees 2012).
    for d in [3.0, 4.0, 5.0] {
        for &xi in &XIS {
            // G = 1 ± (terms of size ≤ 1): compared on that scale.
            let fb = bulk_block(d, d - 2.0, xi).unwrap();
            close(
                1.0 + fb,
                free_scalar(d, xi, 1.0),
                TOL,
                "Neumann, bulk channel",
            );
            close_to_scale(
                1.0 - fb,
                free_scalar(d, xi, -1.0),
                TOL,
                1.0,
                "Dirichlet, bulk channel",
            );
        }
    }
}

#[test]
fn free_scalar_in_the_boundary_channel() {
    // Neumann: one block, Δ̂ = d/2 - 1, μ² = 2; Dirichlet: one block, Δ̂ = d/2,
    // μ² = (d - 2)/2; G = ξ^Δ μ² f_bdy(Δ̂; ξ), Δ = d/2 - 1 (derived in the
    // module doc of numeric::special::blocks). Crossing: both channels agree.
    for d in [3.0, 4.0, 5.0] {
        let delta = d / 2.0 - 1.0;
        for &xi in &XIS {
            let neumann = 2.0 * xi.powf(delta) * boundary_block(d, d / 2.0 - 1.0, xi).unwrap();
            let dirichlet =
                (d - 2.0) / 2.0 * xi.powf(delta) * boundary_block(d, d / 2.0, xi).unwrap();
            // The Dirichlet G = 1 - (…) is compared on the scale of its terms, 1.
            let bulk = bulk_block(d, d - 2.0, xi).unwrap();
            close(
                neumann,
                free_scalar(d, xi, 1.0),
                TOL,
                "Neumann, boundary channel",
            );
            close(neumann, 1.0 + bulk, TOL, "Neumann crossing");
            let g = free_scalar(d, xi, -1.0);
            close_to_scale(dirichlet, g, TOL, 1.0, "Dirichlet, boundary channel");
            close_to_scale(dirichlet, 1.0 - bulk, TOL, 1.0, "Dirichlet crossing");
        }
    }
}

#[test]
fn boundary_block_is_continuous_at_the_unitarity_bound() {
    // f_bdy(d/2 - 1 + ε) → f_bdy(d/2 - 1), the limit of the module doc.
    for d in [3.0, 4.0, 5.0, 6.0] {
        for &xi in &[0.05, 1.0, 20.0] {
            let at = boundary_block(d, d / 2.0 - 1.0, xi).unwrap();
            for &eps in &[1e-9, -1e-9] {
                let near = boundary_block(d, d / 2.0 - 1.0 + eps, xi).unwrap();
                close(near, at, 1e-7, "continuity in Δ̂");
            }
        }
    }
}

#[test]
fn blocks_have_their_channel_limits() {
    // f_bulk ~ ξ^(Δ/2) as ξ → 0 and f_bdy ~ ξ^(-Δ̂) as ξ → ∞ (the
    // normalisation of the module doc; ₂F₁(…; 0) = 1, DLMF 15.2.1).
    for d in [3.0, 4.0] {
        for &delta in &[1.3, 4.0, 9.5] {
            let xi: f64 = 1e-12;
            close(
                bulk_block(d, delta, xi).unwrap() / xi.powf(delta / 2.0),
                1.0,
                1e-10,
                "bulk OPE",
            );
            let xi: f64 = 1e12;
            close(
                boundary_block(d, delta, xi).unwrap() * xi.powf(delta),
                1.0,
                1e-10,
                "boundary OPE",
            );
        }
    }
}

/// Blocks at generic dimensions: mpmath 1.3.0 at 40 digits,
/// ξ^(Δ/2) hyp2f1(Δ/2, Δ/2, Δ + 1 - d/2, -ξ) and
/// ξ^(-Δ̂) hyp2f1(Δ̂, Δ̂ + 1 - d/2, 2Δ̂ + 2 - d, -1/ξ); (d, Δ, ξ, value).
const MPMATH_BULK: [(f64, f64, f64, f64); 6] = [
    (3.0, 1.5, 0.25, 0.31171087641399338061),
    (3.0, 4.75, 12.0, 6.3279935292710048305),
    (4.0, 2.0, 0.001, 0.00099900099900099902177),
    (4.0, 6.5, 3.0, 1.9141165579784634589),
    (5.0, 7.25, 0.5, 0.031390786562538592938),
    (6.0, 11.0, 40.0, 138.28380438794914993),
];
const MPMATH_BOUNDARY: [(f64, f64, f64, f64); 6] = [
    (3.0, 0.75, 0.25, 1.6089917283814207841),
    (3.0, 2.5, 12.0, 0.0018127312199089520514),
    (4.0, 1.25, 0.001, 540.350130556656409),
    (4.0, 6.5, 3.0, 0.00030319330849026485589),
    (5.0, 3.25, 0.5, 1.5540241867566474119),
    (6.0, 9.0, 40.0, 3.4127414275834084012e-15),
];

#[test]
fn blocks_agree_with_an_arbitrary_precision_library() {
    for &(d, delta, xi, want) in &MPMATH_BULK {
        close(
            bulk_block(d, delta, xi).unwrap(),
            want,
            TOL,
            "f_bulk (mpmath)",
        );
    }
    for &(d, delta, xi, want) in &MPMATH_BOUNDARY {
        close(
            boundary_block(d, delta, xi).unwrap(),
            want,
            TOL,
            "f_bdy (mpmath)",
        );
    }
}

#[test]
fn blocks_need_a_positive_cross_ratio() {
    assert_eq!(bulk_block(4.0, 2.0, 0.0), Err(SpecialError::CrossRatio));
    assert_eq!(
        boundary_block(4.0, 2.0, -1.0),
        Err(SpecialError::CrossRatio)
    );
    assert_eq!(bulk_block(4.0, f64::NAN, 1.0), Err(SpecialError::NotFinite));
    // Below the bulk unitarity bound the ₂F₁ may hit its pole: c = Δ + 1 - d/2 = 0.
    assert_eq!(bulk_block(4.0, 1.0, 1.0), Err(SpecialError::ParameterPole));
}
