//! Γ(x), ln|Γ(x)|, 1/Γ(x) and ψ(x) = Γ'(x)/Γ(x) for real x, and the
//! divided difference of ln Γ that the degenerate connection formulas of
//! ₂F₁ need.
//!
//! Γ and ln Γ use Lanczos' approximation with Godfrey's coefficients
//! (g = 607/128, 15 terms; relative error about 1e-16 in exact arithmetic,
//! checked against an arbitrary-precision library when they were written
//! down) for x ≥ 1/2 and the reflection formula Γ(x)Γ(1 - x) = π/sin(πx)
//! (DLMF 5.5.3) below, with sin(πx) reduced exactly. Whole arguments up to
//! 30 are products, exact as far as floating point goes.
//!
//! ψ and the divided difference (ln|Γ(x + e)| - ln|Γ(x)|)/e come from
//! Stirling's series (DLMF 5.11.1) at arguments ≥ 10, reached by the
//! recurrence Γ(x + 1) = xΓ(x), and reflection below 1/2. The difference is
//! formed term by term (ln(1 + e/x), expm1), so it stays accurate as e → 0,
//! where it tends to ψ(x).

use std::f64::consts::PI;

use super::{finite, SpecialError};

/// Γ(x). A pole (x a non-positive integer) and overflow (x > 171.6) are
/// errors.
pub fn gamma(x: f64) -> Result<f64, SpecialError> {
    if !x.is_finite() {
        return Err(SpecialError::NotFinite);
    }
    if is_pole(x) {
        return Err(SpecialError::GammaPole);
    }
    finite(gamma_raw(x))
}

/// ln|Γ(x)| and the sign of Γ(x) (±1). A pole is an error.
pub fn ln_gamma(x: f64) -> Result<(f64, f64), SpecialError> {
    if !x.is_finite() {
        return Err(SpecialError::NotFinite);
    }
    if is_pole(x) {
        return Err(SpecialError::GammaPole);
    }
    let (l, s) = ln_gamma_raw(x);
    Ok((finite(l)?, s))
}

/// 1/Γ(x), an entire function: 0 at the poles of Γ, and 0 where Γ
/// overflows. NaN only for a NaN argument.
pub fn rgamma(x: f64) -> f64 {
    if is_pole(x) {
        return 0.0;
    }
    if x > 171.0 {
        let (l, _) = ln_gamma_raw(x);
        return (-l).exp();
    }
    if x < -170.0 {
        let (l, s) = ln_gamma_raw(x);
        return s * (-l).exp();
    }
    1.0 / gamma_raw(x)
}

/// ψ(x) = Γ'(x)/Γ(x) (DLMF 5.2.2). A pole is an error.
pub fn digamma(x: f64) -> Result<f64, SpecialError> {
    if !x.is_finite() {
        return Err(SpecialError::NotFinite);
    }
    if is_pole(x) {
        return Err(SpecialError::GammaPole);
    }
    finite(ln_gamma_diff(x, 0.0))
}

/// True if `x` is a pole of Γ: a non-positive integer.
pub(super) fn is_pole(x: f64) -> bool {
    x <= 0.0 && x == x.floor()
}

/// Γ(x) without argument checks: ±∞ at poles and on overflow.
pub(super) fn gamma_raw(x: f64) -> f64 {
    if x == x.floor() {
        if x <= 0.0 {
            return f64::INFINITY;
        }
        if x <= 30.0 {
            // (x - 1)!, exact up to 22! and correctly rounded step by step.
            let mut p = 1.0;
            let mut k = 2.0;
            while k < x {
                p *= k;
                k += 1.0;
            }
            return p;
        }
    }
    if x < 0.5 {
        // DLMF 5.5.3. sin(πx) is exact in its argument reduction; for
        // x < -170 the result underflows to 0 as it should.
        let s = sin_pi(x);
        let g = gamma_raw(1.0 - x);
        return PI / (s * g);
    }
    lanczos(x)
}

/// ln|Γ(x)| and the sign of Γ(x), without argument checks.
pub(super) fn ln_gamma_raw(x: f64) -> (f64, f64) {
    if x < 0.5 {
        let s = sin_pi(x);
        let (l, _) = ln_gamma_raw(1.0 - x);
        return ((PI / s.abs()).ln() - l, s.signum());
    }
    if x < 30.0 {
        return (gamma_raw(x).ln(), 1.0);
    }
    let z = x - 1.0;
    let t = z + LANCZOS_G + 0.5;
    (
        (z + 0.5) * t.ln() - t + (SQRT_2PI * lanczos_sum(z)).ln(),
        1.0,
    )
}

/// Π Γ(num) / Π Γ(den), with signs; 0 when a denominator is a pole. By
/// direct products for moderate arguments, through ln Γ otherwise so that
/// no factor overflows on its own.
pub(super) fn gamma_ratio(num: &[f64], den: &[f64]) -> f64 {
    if den.iter().any(|&x| is_pole(x)) {
        return 0.0;
    }
    if num.iter().any(|&x| is_pole(x)) {
        return f64::INFINITY;
    }
    let moderate = |x: &f64| x.abs() <= 40.0;
    if num.iter().all(moderate) && den.iter().all(moderate) {
        let mut r = 1.0;
        for &x in num {
            r *= gamma_raw(x);
        }
        for &x in den {
            r /= gamma_raw(x);
        }
        return r;
    }
    let mut l = 0.0;
    let mut sign = 1.0;
    for &x in num {
        let (lx, s) = ln_gamma_raw(x);
        l += lx;
        sign *= s;
    }
    for &x in den {
        let (lx, s) = ln_gamma_raw(x);
        l -= lx;
        sign *= s;
    }
    sign * l.exp()
}

/// (ln|Γ(x + e)| - ln|Γ(x)|)/e for |e| ≤ 1/2, and ψ(x) at e = 0; NaN when
/// a pole of Γ lies in the closed interval between x and x + e (the caller
/// checks with [`pole_free`]).
///
/// Accurate to a few units of rounding relative to the size of the terms
/// it is made of, however small e is: this is what keeps the connection
/// formulas of ₂F₁ free of cancellation when c - a - b is close to an
/// integer.
pub(super) fn ln_gamma_diff(x: f64, e: f64) -> f64 {
    if !pole_free(x, e) {
        return f64::NAN;
    }
    if x.max(x + e) < 0.5 {
        // ln|Γ(x)| = ln π - ln|sin πx| - ln Γ(1 - x) (DLMF 5.5.3), so
        // L(x, e) = -(ln|sin π(x + e)| - ln|sin πx|)/e + L(1 - x, -e), and
        // sin π(x + e)/sin πx = cos πe + cot πx sin πe.
        let cot = cos_pi(x) / sin_pi(x);
        let sine = if e == 0.0 {
            PI * cot
        } else {
            let h = sin_pi(0.5 * e);
            (cot * sin_pi(e) - 2.0 * h * h).ln_1p() / e
        };
        return ln_gamma_diff(1.0 - x, -e) - sine;
    }
    // Both arguments positive here: the interval is pole-free and reaches
    // 1/2. Shift up with ln Γ(y) = ln Γ(y + 1) - ln y.
    // Σ ln(1 + e/y_k)/e = ln Π(1 + e/y_k)/e, with the product less one
    // formed without cancellation: (1 + p)(1 + u) - 1 = p + u(1 + p).
    let mut y = x;
    let (mut product, mut inverses) = (0.0, 0.0);
    while y.min(y + e) < STIRLING_FROM {
        if e == 0.0 {
            inverses += 1.0 / y;
        } else {
            product += (e / y) * (1.0 + product);
        }
        y += 1.0;
    }
    let shift = if e == 0.0 {
        inverses
    } else {
        product.ln_1p() / e
    };
    stirling_diff(y, e) - shift
}

/// True if no pole of Γ lies in the closed interval between x and x + e.
pub(super) fn pole_free(x: f64, e: f64) -> bool {
    let (lo, hi) = if e < 0.0 { (x + e, x) } else { (x, x + e) };
    if lo > 0.0 {
        return true;
    }
    let p = lo.ceil();
    !(p <= hi && p <= 0.0)
}

/// sin(πx), with the argument reduced exactly (so sin_pi(n) = 0 for whole n).
pub(super) fn sin_pi(x: f64) -> f64 {
    // x - 2 round(x/2) is exact for |x| < 2^52, and every larger float is
    // an even integer.
    if x.abs() >= 4_503_599_627_370_496.0 {
        return 0.0;
    }
    let r = x - 2.0 * (0.5 * x).round();
    let r = if r > 0.5 {
        1.0 - r
    } else if r < -0.5 {
        -1.0 - r
    } else {
        r
    };
    (PI * r).sin()
}

/// cos(πx), with the argument reduced exactly (so cos_pi(n + 1/2) = 0).
pub(super) fn cos_pi(x: f64) -> f64 {
    if x.abs() >= 4_503_599_627_370_496.0 {
        return 1.0;
    }
    // r in [0, 1]; 1/2 - r and 1 - r are exact where they are used.
    let r = (x - 2.0 * (0.5 * x).round()).abs();
    if r <= 0.25 {
        (PI * r).cos()
    } else if r < 0.75 {
        (PI * (0.5 - r)).sin()
    } else {
        -(PI * (1.0 - r)).cos()
    }
}

const SQRT_2PI: f64 = 2.506_628_274_631_000_5;

/// Lanczos' g.
const LANCZOS_G: f64 = 607.0 / 128.0;

/// Godfrey's coefficients for g = 607/128.
const LANCZOS_C: [f64; 15] = [
    0.999_999_999_999_997_1,
    57.156_235_665_862_92,
    -59.597_960_355_475_49,
    14.136_097_974_741_747,
    -0.491_913_816_097_620_2,
    0.339_946_499_848_118_9e-4,
    0.465_236_289_270_485_8e-4,
    -0.983_744_753_048_795_6e-4,
    0.158_088_703_224_912_5e-3,
    -0.210_264_441_724_104_9e-3,
    0.217_439_618_115_212_6e-3,
    -0.164_318_106_536_763_9e-3,
    0.844_182_239_838_527_4e-4,
    -0.261_908_384_015_814_1e-4,
    0.368_991_826_595_316_2e-5,
];

/// c0 + Σ c_j/(z + j).
fn lanczos_sum(z: f64) -> f64 {
    let mut s = LANCZOS_C[0];
    for (j, c) in LANCZOS_C.iter().enumerate().skip(1) {
        s += c / (z + j as f64);
    }
    s
}

/// Γ(x) for x ≥ 1/2: Γ(z + 1) = √(2π) t^(z + 1/2) e^(-t) Σ, t = z + g + 1/2.
fn lanczos(x: f64) -> f64 {
    if x > 171.7 {
        return f64::INFINITY;
    }
    let z = x - 1.0;
    let t = z + LANCZOS_G + 0.5;
    // t^(z + 1/2) in two halves, so that it does not overflow before e^(-t)
    // brings it back.
    let half = t.powf(0.5 * (z + 0.5));
    SQRT_2PI * half * ((-t).exp() * half) * lanczos_sum(z)
}

/// Stirling's series is used from here on.
const STIRLING_FROM: f64 = 10.0;

/// B_{2k}/(2k(2k - 1)) for k = 1..8 (DLMF 5.11.1; Bernoulli numbers,
/// DLMF 24.2.1).
const STIRLING_C: [f64; 8] = [
    1.0 / 12.0,
    -1.0 / 360.0,
    1.0 / 1260.0,
    -1.0 / 1680.0,
    1.0 / 1188.0,
    -691.0 / 360_360.0,
    1.0 / 156.0,
    -3617.0 / 122_400.0,
];

/// (ln Γ(y + e) - ln Γ(y))/e from Stirling's series, y and y + e ≥ 10:
/// ln Γ(y) = (y - 1/2) ln y - y + ln √(2π) + Σ c_k y^(1-2k).
fn stirling_diff(y: f64, e: f64) -> f64 {
    let u = e / y;
    // [(y + e - 1/2) ln(y + e) - (y - 1/2) ln y - e]/e
    let main = if e == 0.0 {
        y.ln() - 0.5 / y
    } else {
        (y - 0.5) * (u.ln_1p() / e) + (y + e).ln() - 1.0
    };
    // [(y + e)^(-j) - y^(-j)]/e = y^(-j-1) [(1 + u)^(-j) - 1]/u, and with
    // v = 1/(1 + u), [(1 + u)^(-j) - 1]/u = -v (1 + v + … + v^(j-1)): no
    // cancellation, and -j at e = 0.
    let v = y / (y + e);
    let inv2 = 1.0 / (y * y);
    let mut yj = inv2; // y^(-j-1), j = 1
    let (mut geometric, mut vi, mut i) = (0.0, 1.0, 0);
    let mut series = 0.0;
    for (k, c) in STIRLING_C.iter().enumerate() {
        while i < 2 * k + 1 {
            geometric += vi;
            vi *= v;
            i += 1;
        }
        series += c * yj * (-v * geometric);
        yj *= inv2;
    }
    main + series
}

#[cfg(test)]
mod tests {
    use super::*;

    // Internal identities only; published values are in tests/special.rs.

    #[test]
    fn divided_difference_tends_to_digamma() {
        for &x in &[0.3, 1.0, 2.5, 7.25, -0.4, -3.7, 12.0, 55.5] {
            let psi = ln_gamma_diff(x, 0.0);
            let near = ln_gamma_diff(x, 1e-9);
            assert!((psi - near).abs() < 1e-8 * (1.0 + psi.abs()), "{x}");
        }
    }

    #[test]
    fn divided_difference_matches_log_gamma_for_large_steps() {
        for &(x, e) in &[
            (0.3, 0.4),
            (2.5, -0.45),
            (-3.7, 0.3),
            (14.0, 0.5),
            (0.9, -0.45),
        ] {
            let direct = (ln_gamma_raw(x + e).0 - ln_gamma_raw(x).0) / e;
            let d = ln_gamma_diff(x, e);
            assert!(
                (d - direct).abs() < 1e-13 * (1.0 + d.abs()),
                "{x} {e}: {d} {direct}"
            );
        }
    }

    #[test]
    fn poles_are_found_in_closed_intervals() {
        assert!(!pole_free(-0.1, 0.1));
        assert!(!pole_free(-2.2, 0.3));
        assert!(pole_free(-2.2, 0.1));
        assert!(pole_free(0.5, -0.4));
        assert!(!pole_free(0.3, -0.3));
        assert!(!pole_free(-3.0, 0.0));
    }

    #[test]
    fn sine_of_pi_x_vanishes_at_integers() {
        for n in -5..=5 {
            assert_eq!(sin_pi(n as f64), 0.0);
        }
        assert_eq!(cos_pi(0.5), 0.0);
        assert_eq!(cos_pi(2.0), 1.0);
    }
}
