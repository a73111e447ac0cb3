//! The Gauss hypergeometric function ₂F₁(a, b; c; z) for real a, b, c and
//! real z, to about 1e-13 relative wherever it is real and defined.
//!
//! ₂F₁(a, b; c; z) = Σ_k (a)_k (b)_k / ((c)_k k!) z^k (DLMF 15.2.1), continued
//! analytically to z < 1 and, where it is a polynomial, to every z. How each
//! part of the real axis is done:
//!
//! - **0 ≤ z ≤ 1/2**: the defining series, stopped by a rigorous bound on
//!   its tail (`series`).
//! - **-1 ≤ z < 0**: Pfaff's transformation ₂F₁(a, b; c; z) =
//!   (1 - z)^(-a) ₂F₁(a, c - b; c; z/(z - 1)) (DLMF 15.8.1), whose series in
//!   w = z/(z - 1) ∈ (0, 1/2] does not alternate for positive parameters.
//! - **1/2 < z < 1**: the connection formula to 1 - z (DLMF 15.8.4; Abramowitz
//!   & Stegun 15.3.6), written so that it has no cancellation when c - a - b
//!   is an integer or close to one: with c - a - b = m + ε, m the nearest
//!   integer, the pole of Γ(c - a - b) in the first term and the pole of
//!   Γ(a + b - c) in the second are taken together term by term (the
//!   approach, from memory, of Forrey 1997 and of Michel & Stoitsov 2008,
//!   derived again in `near_one`). At ε = 0 this is exactly the logarithmic
//!   case, DLMF 15.8.10 / Abramowitz & Stegun 15.3.10–15.3.12.
//! - **z < -1**: Pfaff to w = z/(z - 1) ∈ (1/2, 1), then the connection to
//!   1 - w = 1/(1 - z). This is DLMF 15.8.2 (z → 1/z) in a variable that is
//!   at most 1/2; the degenerate case b - a an integer (DLMF 15.8.8) is the
//!   same logarithmic case as above.
//! - **z = 1**: Gauss's sum Γ(c)Γ(c - a - b)/(Γ(c - a)Γ(c - b)) when
//!   c - a - b > 0 (DLMF 15.4.20); divergent otherwise (an error).
//! - **Polynomials** (a or b a non-positive integer -n): the finite sum, its
//!   Pfaff transform, its re-expansion about z = 1 (DLMF 15.8.7) or the
//!   contiguous relation in a (DLMF 15.5.11), whichever loses least to
//!   rounding; real for every z.
//!
//! Each way of summing reports the size of its terms beside the value, and
//! where the first choice cancels the others are tried: in the first two
//! regions Euler's ₂F₁ = (1 - z)^(c-a-b) ₂F₁(c - a, c - b; c; z), the other
//! Pfaff form and the plain series; beside a connection formula, DLMF 15.8.4
//! with its two terms summed apart, and the series in z (or w) itself when
//! it ends within a budget of terms (for large parameters near z = 1 it
//! is the only sum without cancellation).
//!
//! Conventions: when c = -m is a non-positive integer, ₂F₁ is defined only
//! if a or b is -n with n ≤ m, and is then the terminating sum (DLMF
//! 15.2.6's convention); so ₂F₁(a, 0; 0; z) = 1. The limit along b = c/2 → 0,
//! which the boundary block at the unitarity bound needs, is a different
//! number: [`hyp2f1_vanishing_bc`]. The regularised function ₂F₁/Γ(c), which
//! is entire in c, is [`hyp2f1_regularized`].
//!
//! Accuracy, measured against an arbitrary-precision library on random
//! arguments: 1e-14 relative typically and 1e-13 at worst for parameters up
//! to about 20, on the whole axis; a few 1e-13 for parameters near 30 at
//! |z| of a few hundred. Where ₂F₁ itself is much smaller than the terms of
//! every expansion (large a and b beside a small c at z < 0, where it
//! oscillates; near its zeros; high-degree polynomials inside their
//! interval of oscillation) the error is about 1e-16 of the terms' size:
//! [`hyp2f1_scale`] returns that size, and [`hyp2f1`] refuses with
//! [`SpecialError::Cancellation`] when it exceeds the value 1e5 times.
//! Parameters beyond a few hundred work or fail with
//! [`SpecialError::TooLarge`] or [`SpecialError::Overflow`]; no NaN or wrong
//! number is returned silently. (DLMF equation numbers from memory; the
//! formulas are checked numerically in `tests/special.rs`.)

use super::gamma::{gamma_ratio, ln_gamma_diff, pole_free};
use super::{finite, SpecialError};

/// ₂F₁(a, b; c; z) for real arguments.
///
/// Errors: an argument that is not finite; c a pole of the series
/// ([`SpecialError::ParameterPole`]); z > 1 unless the function is a
/// polynomial ([`SpecialError::BranchCut`]); z = 1 with c - a - b ≤ 0
/// ([`SpecialError::Divergent`]); a value out of range; a value lost to
/// cancellation (see [`hyp2f1_scale`]).
///
/// Cost, for moderate parameters: a series of a few dozen terms, about
/// 0.1 µs near z = 0 and 0.2–1 µs where a transformation is needed
/// (`cargo bench --bench special`); no allocation, so it can be called at
/// every quadrature node.
pub fn hyp2f1(a: f64, b: f64, c: f64, z: f64) -> Result<f64, SpecialError> {
    Ok(hyp2f1_scale(a, b, c, z)?.0)
}

/// ₂F₁(a, b; c; z) and its scale: the size of the terms it was summed from
/// (at least |value|). The rounding error is about 1e-16 times the scale,
/// so the scale says how far a comparison may trust the value; an
/// evaluation whose scale exceeds 1e5 |value| is refused with
/// [`SpecialError::Cancellation`] instead of losing more than five digits.
pub fn hyp2f1_scale(a: f64, b: f64, c: f64, z: f64) -> Result<(f64, f64), SpecialError> {
    let v = evaluate(a, b, c, z)?;
    let value = finite(v.value)?;
    let scale = v.size.max(value.abs());
    if scale > MAX_CANCELLATION * value.abs() {
        return Err(SpecialError::Cancellation);
    }
    Ok((value, scale))
}

fn evaluate(a: f64, b: f64, c: f64, z: f64) -> Result<Sum, SpecialError> {
    if !(a.is_finite() && b.is_finite() && c.is_finite() && z.is_finite()) {
        return Err(SpecialError::NotFinite);
    }
    let degree = match (non_positive_integer(a), non_positive_integer(b)) {
        (Some(n), Some(k)) => Some(n.min(k)),
        (n, k) => n.or(k),
    };
    if let Some(m) = non_positive_integer(c) {
        match degree {
            Some(n) if n <= m => {}
            _ => return Err(SpecialError::ParameterPole),
        }
    }
    if z == 0.0 || a == 0.0 || b == 0.0 {
        return Ok(Sum::exact(1.0));
    }
    if let Some(n) = degree {
        // Put the terminating parameter first.
        let (a, b) = if non_positive_integer(a) == Some(n) {
            (a, b)
        } else {
            (b, a)
        };
        return polynomial(a, b, c, z, n);
    }
    if z > 1.0 {
        return Err(SpecialError::BranchCut);
    }
    if z == 1.0 {
        return Ok(Sum::exact(at_one(a, b, c)?));
    }
    // ₂F₁(a, b; a; z) = (1 - z)^(-b) (DLMF 15.4.6).
    if a == c {
        return Ok(Sum::exact((1.0 - z).powf(-b)));
    }
    if b == c {
        return Ok(Sum::exact((1.0 - z).powf(-a)));
    }
    analytic(a, b, c, z)
}

/// ₂F₁(a, b; c; z)/Γ(c), entire in a, b and c (DLMF 15.2.2). At c = -m, a
/// non-positive integer, it is the limit
/// (a)_{m+1} (b)_{m+1}/(m + 1)! z^{m+1} ₂F₁(a + m + 1, b + m + 1; m + 2; z)
/// (DLMF 15.2.3_5, §15.2(ii)), which vanishes when a or b is -n with n ≤ m.
pub fn hyp2f1_regularized(a: f64, b: f64, c: f64, z: f64) -> Result<f64, SpecialError> {
    if !(a.is_finite() && b.is_finite() && c.is_finite() && z.is_finite()) {
        return Err(SpecialError::NotFinite);
    }
    let Some(m) = non_positive_integer(c) else {
        return finite(hyp2f1(a, b, c, z)? * super::gamma::rgamma(c));
    };
    let m1 = m as f64 + 1.0;
    let mut p = z.powf(m1);
    for j in 0..=m {
        let j = j as f64;
        p *= (a + j) * (b + j) / (j + 1.0);
    }
    if p == 0.0 {
        return Ok(0.0);
    }
    finite(p * hyp2f1(a + m1, b + m1, m1 + 1.0, z)?)
}

/// The limit of ₂F₁(a, r t; t; z) as t → 0, with the ratio r = b/c held
/// fixed: 1 - r + r (1 - z)^(-a).
///
/// Derivation: (b)_k/(c)_k = (r t)(r t + 1)…/(t (t + 1)…) → r for every
/// k ≥ 1, so the series tends to 1 + r Σ_{k≥1} (a)_k z^k/k! =
/// 1 + r ((1 - z)^(-a) - 1) by the binomial series (DLMF 15.4.6). With
/// r = 1/2 this is (1 + (1 - z)^(-a))/2, the boundary block at the unitarity
/// bound Δ̂ = d/2 - 1, where b = Δ̂ + 1 - d/2 and c = 2Δ̂ + 2 - d vanish
/// together.
///
/// Real for z < 1, and for every z when a is a whole number; at z = 1 it
/// diverges for a > 0 (unless r = 0).
pub fn hyp2f1_vanishing_bc(a: f64, r: f64, z: f64) -> Result<f64, SpecialError> {
    if !(a.is_finite() && r.is_finite() && z.is_finite()) {
        return Err(SpecialError::NotFinite);
    }
    if r == 0.0 || a == 0.0 {
        return Ok(1.0);
    }
    let power = if a == a.trunc() && a.abs() <= i32::MAX as f64 {
        (1.0 - z).powi(-(a as i32))
    } else if z < 1.0 {
        (1.0 - z).powf(-a)
    } else if z == 1.0 {
        if a > 0.0 {
            return Err(SpecialError::Divergent);
        }
        0.0
    } else {
        return Err(SpecialError::BranchCut);
    };
    if !power.is_finite() && z == 1.0 {
        return Err(SpecialError::Divergent);
    }
    finite(1.0 - r + r * power)
}

/// Largest factor by which the terms of a sum may exceed its value.
const MAX_CANCELLATION: f64 = 1e5;

/// Most terms any one series may take.
const MAX_TERMS: usize = 100_000;

/// Stop a series when the bound on its tail is below this, relative.
const TOL: f64 = 1.0 / (1u64 << 56) as f64;

/// Accept a first choice whose cancellation factor (Σ|terms|/|sum|) is at
/// most this; otherwise try the alternatives.
const GOOD_ENOUGH: f64 = 4.0;

/// Most terms (estimated) that a series in z or w close to 1 may take as
/// an alternative to a connection formula that cancels; four times as
/// many when the cancellation would cost more than two digits.
const SLOW_SERIES: f64 = 20_000.0;

/// True if the series at 0 < x < 1 with parameters of the sizes of a, b, c
/// (or of their Pfaff and Euler partners) ends within the budget of terms
/// that a cancellation of `by` (Σ|terms|/|sum| of the connection formula)
/// buys: the series grows until about k = (|a| + |b| + |c|) x/(1 - x),
/// then falls by the factor x per term, and 40 e-folds reach the
/// tolerance.
fn affordable(a: f64, b: f64, c: f64, x: f64, by: f64) -> bool {
    let n = ((a.abs() + b.abs() + c.abs()) * x + 40.0) / (1.0 - x);
    n <= if by > 1e2 {
        4.0 * SLOW_SERIES
    } else {
        SLOW_SERIES
    }
}

/// A value with the size of the terms it was summed from: `size/|value|`
/// is the factor by which rounding errors were magnified.
#[derive(Clone, Copy, Debug)]
struct Sum {
    value: f64,
    size: f64,
}

impl Sum {
    fn exact(value: f64) -> Sum {
        Sum {
            value,
            size: value.abs(),
        }
    }

    fn cancellation(&self) -> f64 {
        if self.value == 0.0 {
            f64::INFINITY
        } else {
            self.size / self.value.abs()
        }
    }

    fn scaled(self, by: f64) -> Sum {
        Sum {
            value: self.value * by,
            size: self.size * by.abs(),
        }
    }
}

/// n if x = -n for a whole n ≥ 0.
fn non_positive_integer(x: f64) -> Option<u64> {
    (x <= 0.0 && x == x.trunc() && x > -1e15).then(|| (-x) as u64)
}

/// Gauss's sum (DLMF 15.4.20), a, b not non-positive integers.
fn at_one(a: f64, b: f64, c: f64) -> Result<f64, SpecialError> {
    if c - a - b <= 0.0 {
        return Err(SpecialError::Divergent);
    }
    finite(gamma_ratio(&[c, c - a - b], &[c - a, c - b]))
}

/// ₂F₁ for z < 1, z ≠ 0, not a polynomial, c not a pole.
fn analytic(a: f64, b: f64, c: f64, z: f64) -> Result<Sum, SpecialError> {
    if z < -1.0 {
        // Pfaff, then the connection at w = z/(z - 1) → 1, in s = 1 - w.
        // Of the two Pfaff forms take the one whose c - a' - b' rounds to
        // a non-negative integer (b - a or a - b).
        let s = 1.0 / (1.0 - z);
        let w = z / (z - 1.0);
        let v = if (b - a).round() >= 0.0 {
            near_one(a, c - b, c, s, w)?.scaled(s.powf(a))
        } else {
            near_one(c - a, b, c, s, w)?.scaled(s.powf(b))
        };
        // The connection formula cancels for some parameters; while the
        // series in w still converges reasonably, it may do better.
        if v.cancellation() > GOOD_ENOUGH && affordable(a, b, c, w, v.cancellation()) {
            let pfaff_a = || Ok(series(a, c - b, c, w)?.scaled(s.powf(a)));
            let pfaff_b = || Ok(series(c - a, b, c, w)?.scaled(s.powf(b)));
            return Ok(better(v, &[&pfaff_a, &pfaff_b]));
        }
        return Ok(v);
    }
    if z > 0.5 {
        let s = 1.0 - z; // exact for z in [1/2, 1]
        let v = near_one(a, b, c, s, z)?;
        if v.cancellation() > GOOD_ENOUGH && affordable(a, b, c, z, v.cancellation()) {
            let direct = || series(a, b, c, z);
            let euler = || Ok(series(c - a, c - b, c, z)?.scaled(s.powf(c - a - b)));
            return Ok(better(v, &[&direct, &euler]));
        }
        return Ok(v);
    }
    let w = z / (z - 1.0);
    let pfaff_a = || Ok(series(a, c - b, c, w)?.scaled((1.0 - z).powf(-a)));
    let pfaff_b = || Ok(series(c - a, b, c, w)?.scaled((1.0 - z).powf(-b)));
    let direct = || series(a, b, c, z);
    let euler = || Ok(series(c - a, c - b, c, z)?.scaled((1.0 - z).powf(c - a - b)));
    if z < 0.0 {
        // Pfaff first: the form whose new parameter c - b (or c - a) is
        // the larger has terms of one sign when a, b, c are positive.
        let (first, second): (Try, Try) = if c - b >= c - a {
            (&pfaff_a, &pfaff_b)
        } else {
            (&pfaff_b, &pfaff_a)
        };
        if z >= -0.5 {
            least_cancellation(&[first, second, &direct])
        } else {
            least_cancellation(&[first, second])
        }
    } else if z <= 1.0 / 3.0 {
        least_cancellation(&[&direct, &euler, &pfaff_a, &pfaff_b])
    } else {
        least_cancellation(&[&direct, &euler])
    }
}

/// One way to compute a value, tried lazily.
type Try<'a> = &'a dyn Fn() -> Result<Sum, SpecialError>;

/// `v`, or the alternative that sums with less cancellation.
fn better(v: Sum, others: &[Try]) -> Sum {
    let mut best = v;
    for f in others {
        if let Ok(o) = f() {
            if o.value.is_finite() && o.cancellation() < best.cancellation() {
                best = o;
            }
        }
    }
    best
}

/// The first candidate if it sums cleanly, else the best of all.
fn least_cancellation(order: &[Try]) -> Result<Sum, SpecialError> {
    let mut best: Option<Sum> = None;
    let mut error = SpecialError::TooLarge;
    for (i, f) in order.iter().enumerate() {
        match f() {
            Ok(v) if v.value.is_finite() => {
                if i == 0 && v.cancellation() <= GOOD_ENOUGH {
                    return Ok(v);
                }
                if best.map_or(true, |b| v.cancellation() < b.cancellation()) {
                    best = Some(v);
                }
            }
            Ok(_) => error = SpecialError::Overflow,
            Err(e) => error = e,
        }
    }
    best.ok_or(error)
}

/// The defining series Σ (a)_k (b)_k/((c)_k k!) z^k for |z| < 1 (or a
/// terminating one), c not a pole before the series ends.
///
/// Stopping rule: once a + j, b + j and c + j are positive for all later
/// j, the ratio of successive terms (a + j)(b + j)/((c + j)(j + 1)) |z| is
/// bounded by ρ = |z| max(1, (a + k)/(k + 1)) max(1, (b + k)/(c + k)) (each
/// factor is monotone in j and tends to 1), so the tail after a term t is
/// at most |t| ρ/(1 - ρ).
fn series(a: f64, b: f64, c: f64, z: f64) -> Result<Sum, SpecialError> {
    let mut t = 1.0;
    let mut sum = 1.0;
    let mut size = 1.0;
    let az = z.abs();
    for k in 0..MAX_TERMS {
        let k = k as f64;
        if a + k == 0.0 || b + k == 0.0 {
            // A terminating series ends here (checked before the
            // denominator, which may vanish at the same k).
            return Ok(Sum { value: sum, size });
        }
        t *= (a + k) * (b + k) * z / ((c + k) * (k + 1.0));
        sum += t;
        size += t.abs();
        if t == 0.0 {
            return Ok(Sum { value: sum, size });
        }
        // The bound below is at least |t z|: skip it while that is too big.
        if (t * z).abs() > TOL * sum.abs() && (t * z).abs() > TOL * f64::EPSILON * size {
            continue;
        }
        let j = k + 1.0;
        if a + j > 0.0 && b + j > 0.0 && c + j > 0.0 {
            let rho = az * ((a + j) / (j + 1.0)).max(1.0) * ((b + j) / (c + j)).max(1.0);
            if rho < 1.0 {
                let tail = t.abs() * rho / (1.0 - rho);
                if tail <= TOL * sum.abs() || tail <= TOL * f64::EPSILON * size {
                    return Ok(Sum { value: sum, size });
                }
            }
        }
    }
    Err(SpecialError::TooLarge)
}

/// A polynomial: a = -n (n ≤ the degree of b if b terminates too).
/// Candidates: the sum itself, its Pfaff transform
/// (1 - z)^n ₂F₁(-n, c - b; c; z/(z - 1)) (DLMF 15.8.1), its
/// re-expansion about 1, ((c - b)_n/(c)_n) ₂F₁(-n, b; b - c - n + 1; 1 - z)
/// (DLMF 15.8.7), and the contiguous relation in a; at z = 1 the
/// Chu–Vandermonde sum (c - b)_n/(c)_n (DLMF 15.4.24). Where the
/// polynomial oscillates (like a Jacobi polynomial inside its interval of
/// orthogonality) every sum cancels and the recurrence does best.
fn polynomial(a: f64, b: f64, c: f64, z: f64, n: u64) -> Result<Sum, SpecialError> {
    if n as usize >= MAX_TERMS {
        return Err(SpecialError::TooLarge);
    }
    let chu = || {
        let mut p = 1.0;
        for j in 0..n {
            let j = j as f64;
            p *= (c - b + j) / (c + j);
        }
        p
    };
    if z == 1.0 {
        let v = chu();
        return Ok(Sum {
            value: v,
            size: v.abs(),
        });
    }
    let nf = n as f64;
    let direct = || series(a, b, c, z);
    let pfaff = || {
        let w = z / (z - 1.0);
        Ok(series(a, c - b, c, w)?.scaled((1.0 - z).powi(n as i32)))
    };
    // The re-expansion needs (b - c - n + 1)_k ≠ 0 for k ≤ n.
    let c1 = b - c - nf + 1.0;
    let one_minus = || {
        if non_positive_integer(c1).is_some_and(|m| m < n) {
            return Err(SpecialError::ParameterPole);
        }
        Ok(series(a, b, c1, 1.0 - z)?.scaled(chu()))
    };
    // The contiguous relation in a (DLMF 15.5.11), run down from F(0) = 1
    // and F(-1) = 1 - bz/c: (c - a) F(a - 1) = -(2a - c + (b - a)z) F(a)
    // - a(z - 1) F(a + 1). Its size is the same recurrence run on absolute
    // values, a bound on how much rounding can grow.
    let recurrence = || {
        let (mut f1, mut f0) = (1.0, 1.0 - b * z / c);
        let (mut e1, mut e0) = (1.0, 1.0 + (b * z / c).abs());
        let mut k = -1.0;
        for _ in 1..n {
            let p = 2.0 * k - c + (b - k) * z;
            let q = k * (z - 1.0);
            let den = c - k;
            let f = -(p * f0 + q * f1) / den;
            let e = (p.abs() * e0 + q.abs() * e1) / den.abs();
            (f1, f0, e1, e0) = (f0, f, e0, e);
            k -= 1.0;
        }
        Ok(Sum {
            value: f0,
            size: e0,
        })
    };
    if z > 0.5 && z < 2.0 {
        least_cancellation(&[&one_minus, &direct, &pfaff, &recurrence])
    } else if z < 0.0 {
        least_cancellation(&[&pfaff, &direct, &one_minus, &recurrence])
    } else {
        least_cancellation(&[&direct, &pfaff, &one_minus, &recurrence])
    }
}

/// ₂F₁(a, b; c; 1 - s) for 0 < s ≤ 1/2 through the connection formula to
/// s = 1 - z, uniformly in c - a - b; `w` is 1 - s as the caller best
/// knows it. a and b are not non-positive integers; c is not a pole.
///
/// Write c - a - b = m + ε with m the nearest integer. If m < 0, Euler's
/// transformation ₂F₁(a, b; c; z) = s^(c-a-b) ₂F₁(c - a, c - b; c; z) (DLMF
/// 15.8.1) makes it positive, so take m ≥ 0, |ε| ≤ 1/2. DLMF 15.8.4 reads
/// F = T1 + T2 with
///
///   T1 = Γ(c)Γ(m+ε)/(Γ(c-a)Γ(c-b)) Σ_k (a)_k(b)_k/((1-m-ε)_k k!) s^k,
///   T2 = s^(m+ε) Γ(c)Γ(-m-ε)/(Γ(a)Γ(b)) Σ_n (c-a)_n(c-b)_n/((m+ε+1)_n n!) s^n.
///
/// The terms k < m of T1 are regular as ε → 0 and kept as they are. In the
/// terms k = m + n, (1-m-ε)_{m+n} = (-1)^m Γ(m+ε)/Γ(ε) · (1-ε)_n, and
/// Γ(-m-ε) = (-1)^(m+1) Γ(ε)Γ(1-ε)/Γ(1+m+ε) (reflection, DLMF 5.5.3), so
/// that with c - a = b + m + ε, c - b = a + m + ε and Γ(ε) = Γ(1+ε)/ε,
///
///   T1(k ≥ m) + T2 = Q Σ_n s^n (α_n - β_n)/ε,
///   Q   = (-1)^m Γ(c)Γ(1+ε) s^m/(Γ(a)Γ(b) m!),
///   α_n = m! Γ(a+m+n)Γ(b+m+n)Γ(1-ε)/(Γ(a+m+ε)Γ(b+m+ε)Γ(n+1-ε)(m+n)!),
///   β_n = m! s^ε Γ(1-ε) (a+m+ε)_n (b+m+ε)_n/(Γ(m+n+1+ε) n!),
///
/// with α_0 = β_0 at ε = 0. With L(x, e) = (ln Γ(x+e) - ln Γ(x))/e,
/// α_0 = exp(εX) and β_0 = exp(εY) for X = -L(a+m, ε) - L(b+m, ε) and
/// Y = ln s - L(1, -ε) - L(m+1, ε), so δ_0 = (α_0 - β_0)/ε =
/// e^(εY) (X - Y) expm1(ε(X - Y))/(ε(X - Y)): no cancellation, and at ε = 0
/// the bracket ψ(1) + ψ(m+1) - ψ(a+m) - ψ(b+m) - ln s of A&S 15.3.11.
/// The later δ_n = (α_n - β_n)/ε follow from α_{n+1} = r_n α_n,
/// β_{n+1} = q_n β_n as δ_{n+1} = q_n δ_n + α_n (r_n - q_n)/ε, where with
/// A = a+m+n, B = b+m+n, K = n+1, N = m+n+1 the quotient
/// (r_n - q_n)/ε = [AB(K+N) - (A+B)KN + εN(A+B-K) + ε²N]/((K-ε)N(N+ε)K)
/// has been divided out by hand.
///
/// When a pole of Γ lies between a + m and a + m + ε (or for b), ε is not
/// small (a is not a non-positive integer) and δ_0 is formed directly.
fn near_one(a: f64, b: f64, c: f64, s: f64, w: f64) -> Result<Sum, SpecialError> {
    let mut t = c - a - b;
    let (mut a, mut b) = (a, b);
    let mut pre = 1.0;
    if t.round() < 0.0 {
        pre = s.powf(t);
        (a, b) = (c - a, c - b);
        t = -t;
        let (na, nb) = (non_positive_integer(a), non_positive_integer(b));
        if let Some(n) = na.or(nb) {
            let n = match (na, nb) {
                (Some(x), Some(y)) => x.min(y),
                _ => n,
            };
            let (a, b) = if na == Some(n) { (a, b) } else { (b, a) };
            return Ok(polynomial(a, b, c, w, n)?.scaled(pre));
        }
    }
    let m = t.round();
    let e = t - m;
    if m >= MAX_TERMS as f64 {
        return Err(SpecialError::TooLarge);
    }
    let mi = m as usize;

    // The terms k < m of T1.
    let (mut t1, mut t1_size) = (0.0, 0.0);
    if mi > 0 {
        let g = gamma_ratio(&[c, m + e], &[c - a, c - b]);
        let (mut term, mut sum, mut size) = (1.0, 1.0, 1.0);
        for k in 0..mi - 1 {
            let k = k as f64;
            term *= (a + k) * (b + k) * s / ((1.0 - m - e + k) * (k + 1.0));
            sum += term;
            size += term.abs();
        }
        t1 = g * sum;
        t1_size = (g * size).abs();
    }

    // The rest: Q Σ s^n δ_n.
    let sign = if mi % 2 == 0 { 1.0 } else { -1.0 };
    let q = sign * gamma_ratio(&[c, 1.0 + e], &[a, b, m + 1.0]) * s.powf(m);
    if !q.is_finite() || !t1.is_finite() {
        return Err(SpecialError::Overflow);
    }
    let (am, bm) = (a + m, b + m);
    let (mut alpha, mut delta);
    if pole_free(am, e) && pole_free(bm, e) {
        let x = -(ln_gamma_diff(am, e) + ln_gamma_diff(bm, e));
        let y = s.ln() - ln_gamma_diff(1.0, -e) - ln_gamma_diff(m + 1.0, e);
        alpha = (e * x).exp();
        let d = x - y;
        let u = e * d;
        let phi = if u == 0.0 { 1.0 } else { u.exp_m1() / u };
        delta = (e * y).exp() * d * phi;
    } else if e != 0.0 {
        alpha = gamma_ratio(&[am, bm], &[am + e, bm + e]);
        let beta = s.powf(e) * gamma_ratio(&[1.0 - e, m + 1.0], &[m + 1.0 + e]);
        delta = (alpha - beta) / e;
    } else {
        // a or b would be a non-positive integer: excluded by the caller.
        return Err(SpecialError::Overflow);
    }
    let log_s = s.ln().abs();
    let (mut sum, mut size) = (0.0, 0.0);
    let mut sn = 1.0;
    let mut done = q == 0.0;
    for n in 0..MAX_TERMS {
        if done {
            break;
        }
        let term = sn * delta;
        sum += term;
        size += term.abs();
        let nf = n as f64;
        let (aa, bb, kk, nn) = (am + nf, bm + nf, nf + 1.0, m + nf + 1.0);
        let r = aa * bb / ((kk - e) * nn);
        let qn = (aa + e) * (bb + e) / ((nn + e) * kk);
        let dq = (aa * bb * (kk + nn) - (aa + bb) * kk * nn + e * nn * (aa + bb - kk) + e * e * nn)
            / ((kk - e) * nn * (nn + e) * kk);
        delta = delta * qn + alpha * dq;
        alpha *= r;
        sn *= s;
        // Tail from n + 1 on: past the parameters' signs, the ratios are
        // bounded as in `series`; δ grows like α times a logarithm.
        let (a1, b1, k1, n1) = (aa + 1.0, bb + 1.0, kk + 1.0, nn + 1.0);
        if a1 > 0.0 && b1 > 0.0 {
            let rho = s
                * ((a1 + e.abs()) / (k1 - e.abs())).max(1.0)
                * ((b1 + e.abs()) / n1).max(1.0)
                * (1.0 + 1.0 / k1);
            if rho < 1.0 {
                let tail = (delta.abs() + alpha.abs() * (1.0 + log_s)) * sn / (1.0 - rho);
                let total = (t1 + q * sum).abs();
                let tail = tail * q.abs();
                if tail <= TOL * total || tail <= TOL * f64::EPSILON * (t1_size + q.abs() * size) {
                    done = true;
                }
            }
        }
    }
    if !done {
        return Err(SpecialError::TooLarge);
    }
    let v = Sum {
        value: pre * (t1 + q * sum),
        size: (pre * (t1_size + q.abs() * size)).abs(),
    };
    // Far from the logarithmic case the two terms of DLMF 15.8.4, each
    // summed on its own, may cancel less than their combination.
    if v.cancellation() > GOOD_ENOUGH && e.abs() >= 1e-3 {
        let plain = || Ok(connection(a, b, c, s)?.scaled(pre));
        return Ok(better(v, &[&plain]));
    }
    Ok(v)
}

/// DLMF 15.8.4 as it stands, c - a - b not an integer:
/// Γ(c)Γ(c-a-b)/(Γ(c-a)Γ(c-b)) F(a, b; a+b-c+1; s)
/// + s^(c-a-b) Γ(c)Γ(a+b-c)/(Γ(a)Γ(b)) F(c-a, c-b; c-a-b+1; s).
fn connection(a: f64, b: f64, c: f64, s: f64) -> Result<Sum, SpecialError> {
    let t = c - a - b;
    let g1 = gamma_ratio(&[c, t], &[c - a, c - b]);
    let g2 = gamma_ratio(&[c, -t], &[a, b]) * s.powf(t);
    let f1 = if g1 == 0.0 {
        Sum::exact(0.0)
    } else {
        series(a, b, 1.0 - t, s)?.scaled(g1)
    };
    let f2 = if g2 == 0.0 {
        Sum::exact(0.0)
    } else {
        series(c - a, c - b, 1.0 + t, s)?.scaled(g2)
    };
    Ok(Sum {
        value: f1.value + f2.value,
        size: f1.size + f2.size,
    })
}
