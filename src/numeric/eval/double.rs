//! Double-double re-evaluation for values that cancel.
//!
//! When a compiled program's value comes out much smaller than its rounding
//! bound in f64 (terms of size 10¹⁶ summing to about 1, say, far from a
//! wall), the same code runs again on double-double numbers: each value is
//! an unevaluated sum hi + lo of two f64 with |lo| ≤ ulp(hi)/2, about 106
//! bits (Dekker 1971; the error-free transformations two-sum and two-prod,
//! common practice). The rounding bound is carried exactly as in f64
//! (Wilkinson's running error analysis) with the unit roundoff of
//! double-double, 2⁻¹⁰⁴, taken as 2⁻¹⁰⁰ for margin; constants that are not
//! whole numbers below 2⁵³ keep the f64 rounding they were folded with.
//!
//! Powers are done in double-double only for whole and half-whole
//! exponents (repeated squaring, one square root); any other exponent
//! leaves the re-evaluation to give up, and the value stays unknown.

use super::program::{Instr, Op};

/// Unit roundoff of f64.
const EPS: f64 = f64::EPSILON / 2.0;
/// Unit roundoff of double-double with margin.
const EPS_DD: f64 = 7.888_609_052_210_118e-31; // 2^-100

#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Dd {
    pub hi: f64,
    pub lo: f64,
}

fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    (s, (a - (s - bb)) + (b - bb))
}

fn quick_two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    (s, b - (s - a))
}

fn two_prod(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    (p, a.mul_add(b, -p))
}

impl Dd {
    pub fn new(x: f64) -> Dd {
        Dd { hi: x, lo: 0.0 }
    }

    fn norm(hi: f64, lo: f64) -> Dd {
        let (h, l) = quick_two_sum(hi, lo);
        Dd { hi: h, lo: l }
    }

    pub fn add(self, o: Dd) -> Dd {
        let (s1, s2) = two_sum(self.hi, o.hi);
        let (t1, t2) = two_sum(self.lo, o.lo);
        let (s1, s2) = quick_two_sum(s1, s2 + t1);
        Dd::norm(s1, s2 + t2)
    }

    pub fn neg(self) -> Dd {
        Dd {
            hi: -self.hi,
            lo: -self.lo,
        }
    }

    pub fn sub(self, o: Dd) -> Dd {
        self.add(o.neg())
    }

    pub fn mul(self, o: Dd) -> Dd {
        let (p, e) = two_prod(self.hi, o.hi);
        Dd::norm(p, e + (self.hi * o.lo + self.lo * o.hi))
    }

    pub fn recip(self) -> Dd {
        let one = Dd::new(1.0);
        let q1 = 1.0 / self.hi;
        let r = one.sub(self.mul(Dd::new(q1)));
        let q2 = r.hi / self.hi;
        let r = r.sub(self.mul(Dd::new(q2)));
        let q3 = r.hi / self.hi;
        Dd::norm(q1, q2).add(Dd::new(q3))
    }

    pub fn sqrt(self) -> Dd {
        if self.hi <= 0.0 {
            return Dd::new(0.0);
        }
        let q = self.hi.sqrt();
        let r = self.sub(Dd::new(q).mul(Dd::new(q)));
        Dd::norm(q, r.hi / (2.0 * q))
    }

    fn powi(self, mut n: u64) -> Dd {
        let mut base = self;
        let mut out = Dd::new(1.0);
        while n > 0 {
            if n & 1 == 1 {
                out = out.mul(base);
            }
            base = base.mul(base);
            n >>= 1;
        }
        out
    }

    /// x^e for e whole or half-whole; `None` otherwise.
    fn pow(self, e: f64) -> Option<Dd> {
        let twice = 2.0 * e;
        if twice.fract() != 0.0 || twice.abs() > 1e6 {
            return None;
        }
        let whole = e.abs().floor() as u64;
        let mut v = self.powi(whole);
        if e.fract() != 0.0 {
            v = v.mul(self.sqrt());
        }
        Some(if e < 0.0 { v.recip() } else { v })
    }

    pub fn value(self) -> f64 {
        self.hi + self.lo
    }
}

/// Runs `code` on double-double registers with a running rounding bound;
/// `None` when an operation has no real value or a power is not whole or
/// half-whole. Returns the output's value and bound.
pub(super) fn run(
    code: &[Instr],
    template: &[f64],
    loaded: &[f64],
    dim: usize,
    output: usize,
) -> Option<(f64, f64)> {
    let mut regs: Vec<Dd> = loaded.iter().map(|&x| Dd::new(x)).collect();
    // Inputs are exact; constants that are not whole carry their rounding.
    let mut err: Vec<f64> = template
        .iter()
        .map(|&c| {
            // Whole numbers below 2^53 are exact in f64.
            if c.fract() == 0.0 && c.abs() < 9_007_199_254_740_992.0 {
                0.0
            } else {
                EPS * c.abs()
            }
        })
        .collect();
    for ins in code {
        let (v, e) = match ins.op {
            Op::Add(a, b) | Op::Sub(a, b) => {
                let (x, y) = (regs[a as usize], regs[b as usize]);
                let v = if matches!(ins.op, Op::Add(..)) {
                    x.add(y)
                } else {
                    x.sub(y)
                };
                (v, err[a as usize] + err[b as usize] + EPS_DD * v.hi.abs())
            }
            Op::Mul(a, b) => {
                let (x, y) = (regs[a as usize], regs[b as usize]);
                let (ex, ey) = (err[a as usize], err[b as usize]);
                let v = x.mul(y);
                (
                    v,
                    x.hi.abs() * ey + y.hi.abs() * ex + ex * ey + EPS_DD * v.hi.abs(),
                )
            }
            Op::Dist2 {
                p,
                q,
                p_wall,
                q_wall,
            } => {
                let (p, q) = (p as usize, q as usize);
                let mut s = Dd::new(0.0);
                for k in 0..dim {
                    let last = k == dim - 1;
                    let x = if last && p_wall {
                        Dd::new(0.0)
                    } else {
                        regs[p + k]
                    };
                    let y = if last && q_wall {
                        Dd::new(0.0)
                    } else {
                        regs[q + k]
                    };
                    let diff = x.sub(y);
                    s = s.add(diff.mul(diff));
                }
                (s, (dim as f64 + 3.0) * EPS_DD * s.hi)
            }
            Op::Sqrt(a) => {
                let x = regs[a as usize];
                if x.hi < 0.0 {
                    return None;
                }
                let v = x.sqrt();
                let ex = err[a as usize];
                let carried = if x.hi > 0.0 {
                    (ex / v.hi).min(ex.sqrt())
                } else {
                    ex.sqrt()
                };
                (v, carried + EPS_DD * v.hi)
            }
            Op::Recip(a) => {
                let x = regs[a as usize];
                if x.hi == 0.0 {
                    return None;
                }
                let v = x.recip();
                let ex = err[a as usize];
                let carried = if ex < x.hi.abs() {
                    ex / (x.hi.abs() * (x.hi.abs() - ex))
                } else {
                    f64::INFINITY
                };
                (v, carried + EPS_DD * v.hi.abs())
            }
            Op::Pow(a, b) => {
                let (x, y) = (regs[a as usize], regs[b as usize]);
                // The exponent is a number of the file: taken as exact
                // when it is whole or half-whole.
                if err[b as usize] != 0.0 && (2.0 * y.hi).fract() != 0.0 {
                    return None;
                }
                if x.hi <= 0.0 && !(x.hi == 0.0 && y.hi > 0.0) && y.hi.fract() != 0.0 {
                    return None;
                }
                if x.hi == 0.0 && y.hi < 0.0 {
                    return None;
                }
                let v = x.pow(y.hi)?;
                let ex = err[a as usize];
                let relative = if x.hi == 0.0 {
                    if ex == 0.0 {
                        0.0
                    } else {
                        f64::INFINITY
                    }
                } else if ex < x.hi.abs() {
                    let lo = ((x.hi.abs() - ex) / x.hi.abs()).powf(y.hi);
                    let hi = ((x.hi.abs() + ex) / x.hi.abs()).powf(y.hi);
                    (lo - 1.0).abs().max((hi - 1.0).abs())
                } else {
                    f64::INFINITY
                };
                // Repeated squaring rounds about 2 log2|e| + 4 times.
                let steps = 2.0 * (y.hi.abs() + 1.0).log2() + 4.0;
                (v, v.hi.abs() * (relative + steps * EPS_DD))
            }
            // ₂F₁ is known to f64 accuracy only: its value and bound
            // come from f64, with the arguments rounded to it.
            Op::Hyp { a, b, c, z, k } => {
                let args = [a, b, c, z].map(|r| regs[r as usize].value());
                let errs =
                    [a, b, c, z].map(|r| err[r as usize] + EPS * regs[r as usize].value().abs());
                let (v, e) = super::program::hyp_bounded(args, errs, k).ok()?;
                (Dd::new(v), e)
            }
        };
        if !v.hi.is_finite() || v.hi.abs() < f64::MIN_POSITIVE && v.hi != 0.0 {
            return None;
        }
        let out = ins.out as usize;
        regs[out] = v;
        err[out] = if e.is_nan() { f64::INFINITY } else { e };
    }
    let v = regs[output];
    Some((v.value(), err[output] + EPS * v.value().abs()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn arithmetic_keeps_about_106_bits() {
        // (1 + 2^-60) - 1 = 2^-60 exactly, lost in f64.
        let tiny = 2f64.powi(-60);
        let x = Dd::new(1.0).add(Dd::new(tiny)).sub(Dd::new(1.0));
        assert_eq!(x.value(), tiny);
        // 1/3 · 3 = 1 to 1e-30.
        let third = Dd::new(3.0).recip();
        let one = third.mul(Dd::new(3.0));
        assert!((one.hi - 1.0).abs() + one.lo.abs() < 1e-30);
        // √2 · √2 = 2 to 1e-30.
        let r = Dd::new(2.0).sqrt();
        let two = r.mul(r);
        assert!(((two.hi - 2.0) + two.lo).abs() < 1e-30);
        // Half-whole powers: 4^(3/2) = 8, 4^(-1/2) = 1/2.
        assert_eq!(Dd::new(4.0).pow(1.5).unwrap().value(), 8.0);
        assert_eq!(Dd::new(4.0).pow(-0.5).unwrap().value(), 0.5);
        assert!(Dd::new(4.0).pow(0.3).is_none());
    }
}
