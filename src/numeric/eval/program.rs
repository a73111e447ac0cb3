//! The compiled form: straight-line code over one register file, the inputs
//! it reads from [`Values`], and the interpreter.
//!
//! Registers hold constants, inputs (a scalar, the d coordinates of a point,
//! the d^rank components of a parameter tensor) and one result per
//! instruction; every instruction writes a register no other instruction
//! writes (static single assignment), so code runs in order with no
//! control flow. The operations that can fail (square root, reciprocal,
//! power) check their operands and stop the run with the position of the
//! instruction; the error is worded afterwards, off the hot path.

use std::collections::BTreeMap;
use std::fmt::Write as _;

use crate::diagnostic::{Error, ErrorKind, Result};
use crate::numeric::Values;

/// A register number.
pub(super) type Reg = u32;

/// One operation; operands are registers.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub(super) enum Op {
    Add(Reg, Reg),
    Sub(Reg, Reg),
    Mul(Reg, Reg),
    /// |p - q|² between the coordinate blocks starting at `p` and `q`; a
    /// point on the wall (a boundary point or a projection `x∥`) has its
    /// last coordinate taken as 0.
    Dist2 {
        p: Reg,
        q: Reg,
        p_wall: bool,
        q_wall: bool,
    },
    /// √x, for x ≥ 0.
    Sqrt(Reg),
    /// 1/x, for x ≠ 0.
    Recip(Reg),
    /// x^e: fails for x = 0 with e < 0 and for x < 0 with e not whole.
    Pow(Reg, Reg),
    /// The k-th z-derivative of ₂F₁(a, b; c; z), through
    /// [`crate::numeric::special::hyp2f1`]: fails where that has no value.
    Hyp {
        a: Reg,
        b: Reg,
        c: Reg,
        z: Reg,
        k: u32,
    },
}

impl Op {
    /// Calls `f` with every register the operation reads (a distance reads
    /// the first register of each coordinate block; see [`Op::blocks`]).
    pub(super) fn operands(&self, mut f: impl FnMut(Reg)) {
        match *self {
            Op::Add(a, b) | Op::Sub(a, b) | Op::Mul(a, b) | Op::Pow(a, b) => {
                f(a);
                f(b);
            }
            Op::Dist2 { p, q, .. } => {
                f(p);
                f(q);
            }
            Op::Sqrt(a) | Op::Recip(a) => f(a),
            Op::Hyp { a, b, c, z, .. } => {
                f(a);
                f(b);
                f(c);
                f(z);
            }
        }
    }

    /// True if the operand registers are the starts of coordinate blocks.
    pub(super) fn blocks(&self) -> bool {
        matches!(self, Op::Dist2 { .. })
    }
}

/// An instruction: `out ← op`, with the index of the printed subterm it
/// came from (for error messages; `NO_ORIGIN` if none).
#[derive(Clone, Copy, Debug)]
pub(super) struct Instr {
    pub op: Op,
    pub out: Reg,
    pub origin: u32,
}

pub(super) const NO_ORIGIN: u32 = u32::MAX;

/// A value the program reads from [`Values`] before it runs.
#[derive(Clone, Debug)]
pub(super) enum Input {
    Scalar {
        name: String,
        reg: Reg,
    },
    /// All d^rank components, row-major, from `base` on.
    Tensor {
        name: String,
        rank: usize,
        base: Reg,
        parallel: bool,
        antisymmetric: bool,
    },
    /// The d coordinates from `base` on.
    Point {
        name: String,
        base: Reg,
    },
}

/// The code to run when one point moves: what does not depend on it runs
/// once, the rest once per position.
#[derive(Clone, Debug)]
pub(super) struct Moving {
    pub base: Reg,
    pub invariant: Vec<Instr>,
    pub variant: Vec<Instr>,
}

/// An explicit term compiled for one dimension and one choice of its free
/// indices: flat code with no names and no indices left. Build it with
/// [`compile`](super::compile); run it with [`Program::eval`] or, for many
/// positions of one point, [`Program::eval_many`].
#[derive(Clone, Debug)]
pub struct Program {
    pub(super) dim: usize,
    /// The register file before loading: constants in place, zeros
    /// elsewhere.
    pub(super) template: Vec<f64>,
    pub(super) inputs: Vec<Input>,
    pub(super) code: Vec<Instr>,
    pub(super) output: Reg,
    /// Printed subterms, for error messages.
    pub(super) origins: Vec<String>,
    /// Every point the file declares (a point the term does not use may
    /// still be moved: the value is then constant).
    pub(super) declared: Vec<String>,
    /// Per point the term reads: the split of the code for `eval_many`.
    pub(super) moving: BTreeMap<String, Moving>,
}

/// Where a run stopped: the instruction that could not be evaluated.
pub(super) struct Fault(pub(super) Instr);

impl Program {
    /// The dimension the program was compiled for.
    pub fn dim(&self) -> usize {
        self.dim
    }

    /// Number of instructions (after common subexpressions are shared and
    /// constants folded).
    pub fn len(&self) -> usize {
        self.code.len()
    }

    /// True if the value is a constant or a single input.
    pub fn is_empty(&self) -> bool {
        self.code.is_empty()
    }

    /// The points whose coordinates the value depends on.
    pub fn points(&self) -> impl Iterator<Item = &str> {
        self.moving.keys().map(String::as_str)
    }

    /// The value at `values`.
    pub fn eval(&self, values: &Values) -> Result<f64> {
        let mut regs = self.template.clone();
        self.load(values, &mut regs, &[])?;
        run(&self.code, &mut regs, self.dim).map_err(|f| self.fault(&f, &regs, None))?;
        self.finite(regs[self.output as usize], None)
    }

    /// The value at `values` with a bound on its rounding error and the
    /// size of the terms it was summed from (see [`Bounded`]). Slower than
    /// [`Program::eval`]: use it for values that are judged, not for the
    /// inner loop of quadrature.
    pub fn eval_bounded(&self, values: &Values) -> Result<Bounded> {
        let mut regs = self.template.clone();
        self.load(values, &mut regs, &[])?;
        // Constants were rounded once when folded; inputs are taken as exact.
        let mut err: Vec<f64> = self.template.iter().map(|c| EPS * c.abs()).collect();
        let mut mag: Vec<f64> = regs.iter().map(|v| v.abs()).collect();
        let mut loss = Loss::default();
        let loaded = regs.clone();
        run_bounded(
            &self.code, &mut regs, &mut err, &mut mag, self.dim, &mut loss,
        )
        .map_err(|f| self.fault(&f, &regs, None))?;
        let out = self.output as usize;
        let mut value = regs[out];
        // Cancelled in f64: the same code again in double-double, whose
        // value and bound replace these when they are better.
        if !loss.underflow
            && !loss.overflow
            && value.is_finite()
            && err[out] > CANCELLED * value.abs()
        {
            if let Some((v, e)) =
                super::double::run(&self.code, &self.template, &loaded, self.dim, out)
            {
                if e < err[out] {
                    value = v;
                    err[out] = e;
                }
            }
        }
        if !value.is_finite() {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!("the value is {value}: the arithmetic overflowed"),
            ));
        }
        Ok(Bounded {
            value,
            rounding: if err[out].is_nan() {
                f64::INFINITY
            } else {
                err[out]
            },
            scale: mag[out].max(value.abs()),
            underflow: loss.underflow,
            overflow: loss.overflow,
        })
    }

    /// The values at `values` with the point `point` moved to each of
    /// `coords` in turn (its entry in `values.points`, if any, is not
    /// read). The part of the code that does not depend on `point` runs
    /// once.
    pub fn eval_many(&self, values: &Values, point: &str, coords: &[Vec<f64>]) -> Result<Vec<f64>> {
        if !self.declared.iter().any(|p| p == point) {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!("no point named {point} is declared"),
            ));
        }
        let mut regs = self.template.clone();
        self.load(values, &mut regs, &[point])?;
        let Some(moving) = self.moving.get(point) else {
            // The value does not depend on the point.
            run(&self.code, &mut regs, self.dim).map_err(|f| self.fault(&f, &regs, None))?;
            let v = self.finite(regs[self.output as usize], None)?;
            for c in coords {
                self.check_coords(point, c)?;
            }
            return Ok(vec![v; coords.len()]);
        };
        run(&moving.invariant, &mut regs, self.dim).map_err(|f| self.fault(&f, &regs, None))?;
        let base = moving.base as usize;
        let mut out = Vec::with_capacity(coords.len());
        for (sample, c) in coords.iter().enumerate() {
            self.check_coords(point, c)?;
            regs[base..base + self.dim].copy_from_slice(c);
            let at = || Some((sample, point, c.as_slice()));
            run(&moving.variant, &mut regs, self.dim).map_err(|f| self.fault(&f, &regs, at()))?;
            out.push(self.finite(regs[self.output as usize], at())?);
        }
        Ok(out)
    }

    fn check_coords(&self, point: &str, c: &[f64]) -> Result<()> {
        if c.len() != self.dim {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!(
                    "{} coordinates for the point {point}, in dimension {}",
                    c.len(),
                    self.dim
                ),
            ));
        }
        if let Some(x) = c.iter().find(|x| !x.is_finite()) {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!("a coordinate of the point {point} is {x}"),
            ));
        }
        Ok(())
    }

    /// Copies the inputs from `values` into their registers; `skip` names
    /// points and parameter tensors whose values are supplied later.
    pub(super) fn load(&self, values: &Values, regs: &mut [f64], skip: &[&str]) -> Result<()> {
        if values.dim != self.dim {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!(
                    "the values are for dimension {}, the program for dimension {}",
                    values.dim, self.dim
                ),
            ));
        }
        let missing = |what: &str, field: &str, name: &str| {
            Error::new(
                ErrorKind::Numeric,
                format!("no value for the {what} {name}"),
            )
            .with_note(match field {
                "points" => format!(
                    "give it with `place {name} at (…)`; a position written with parameters needs their `values` (or a `scan` over them)"
                ),
                _ => format!("give it with `values {name} = …`"),
            })
        };
        for input in &self.inputs {
            match input {
                Input::Scalar { name, reg } => {
                    let v = *values
                        .scalars
                        .get(name)
                        .ok_or_else(|| missing("parameter", "scalars", name))?;
                    if !v.is_finite() {
                        return Err(Error::new(
                            ErrorKind::Numeric,
                            format!("the parameter {name} is {v}"),
                        ));
                    }
                    regs[*reg as usize] = v;
                }
                Input::Point { name, base } => {
                    if skip.contains(&name.as_str()) {
                        continue;
                    }
                    let c = values
                        .points
                        .get(name)
                        .ok_or_else(|| missing("point", "points", name))?;
                    self.check_coords(name, c)?;
                    let base = *base as usize;
                    regs[base..base + self.dim].copy_from_slice(c);
                }
                Input::Tensor {
                    name,
                    rank,
                    base,
                    parallel,
                    antisymmetric,
                } => {
                    if skip.contains(&name.as_str()) {
                        continue;
                    }
                    let t = values
                        .tensors
                        .get(name)
                        .ok_or_else(|| missing("parameter", "tensors", name))?;
                    check_tensor(name, t, self.dim, *rank, *parallel, *antisymmetric)?;
                    let base = *base as usize;
                    regs[base..base + t.len()].copy_from_slice(t);
                }
            }
        }
        Ok(())
    }

    fn finite(&self, v: f64, at: Option<(usize, &str, &[f64])>) -> Result<f64> {
        if v.is_finite() {
            return Ok(v);
        }
        let mut e = Error::new(
            ErrorKind::Numeric,
            format!("the value is {v}: the arithmetic overflowed"),
        );
        if let Some(at) = at {
            e = e.with_note(sample_note(at));
        }
        Err(e)
    }

    /// The error for a run that stopped at `fault`, with the operands in
    /// `regs`.
    pub(super) fn fault(
        &self,
        fault: &Fault,
        regs: &[f64],
        at: Option<(usize, &str, &[f64])>,
    ) -> Error {
        let Fault(ins) = fault;
        let x = |r: Reg| regs[r as usize];
        let why = match ins.op {
            Op::Sqrt(a) => format!("the square root of {} is not real", x(a)),
            Op::Recip(_) => "division by zero".to_string(),
            Op::Pow(a, b) if x(a) == 0.0 => {
                format!("0 to the negative power {} is a division by zero", x(b))
            }
            Op::Pow(a, b) => format!(
                "{} to the power {} is not real (a negative number to a power that is not whole)",
                x(a),
                x(b)
            ),
            Op::Hyp { a, b, c, z, k } => {
                let why = hyp(x(a), x(b), x(c), x(z), k)
                    .err()
                    .map_or("it has no value there", |e| e.reason());
                let derivative = match k {
                    0 => String::new(),
                    k => format!(" (its derivative of order {k} in z)"),
                };
                format!(
                    "at a = {}, b = {}, c = {}, z = {}{derivative}: {why}",
                    x(a),
                    x(b),
                    x(c),
                    x(z)
                )
            }
            // The other operations cannot fail.
            _ => "the arithmetic failed".to_string(),
        };
        let what = self
            .origins
            .get(ins.origin as usize)
            .map_or(String::new(), |s| format!("{s}: "));
        let mut e = Error::new(ErrorKind::Numeric, format!("cannot evaluate {what}{why}"));
        if let Some(at) = at {
            e = e.with_note(sample_note(at));
        }
        e
    }
}

fn sample_note((sample, point, c): (usize, &str, &[f64])) -> String {
    let mut s = format!("at sample {sample}: {point} = (");
    for (k, x) in c.iter().enumerate() {
        let _ = write!(s, "{}{x}", if k > 0 { ", " } else { "" });
    }
    s + ")"
}

/// Checks a parameter tensor's length and the symmetries its declaration
/// promises (the normal form relies on them).
fn check_tensor(
    name: &str,
    t: &[f64],
    dim: usize,
    rank: usize,
    parallel: bool,
    antisymmetric: bool,
) -> Result<()> {
    let len = u32::try_from(rank)
        .ok()
        .and_then(|r| dim.checked_pow(r))
        .unwrap_or(usize::MAX);
    let err = |m: String| Err(Error::new(ErrorKind::Numeric, m));
    if t.len() != len {
        return err(format!(
            "the parameter {name} has {} components, not {len} (rank {rank} in dimension {dim})",
            t.len()
        ));
    }
    if let Some(x) = t.iter().find(|x| !x.is_finite()) {
        return err(format!("a component of the parameter {name} is {x}"));
    }
    if parallel {
        for (flat, x) in t.iter().enumerate() {
            let mut f = flat;
            let normal = (0..rank).any(|_| {
                let k = f % dim;
                f /= dim;
                k == dim - 1
            });
            if normal && *x != 0.0 {
                return err(format!(
                    "the parameter {name} is declared parallel, but a normal component is {x}"
                ));
            }
        }
    }
    if antisymmetric && rank == 2 {
        for i in 0..dim {
            for j in 0..=i {
                let (a, b) = (t[i * dim + j], t[j * dim + i]);
                if (a + b).abs() > 1e-12 * a.abs().max(b.abs()) || (i == j && a != 0.0) {
                    return err(format!(
                        "the parameter {name} is declared antisymmetric, but {name}[{i},{j}] = {a} and {name}[{j},{i}] = {b}"
                    ));
                }
            }
        }
    }
    Ok(())
}

/// Unit roundoff of f64 (half the machine epsilon).
const EPS: f64 = f64::EPSILON / 2.0;
/// A rounding bound above this fraction of the value sends the evaluation
/// to double-double ([`super::double`]).
const CANCELLED: f64 = 1e-9;
/// The absolute error of rounding a result in the subnormal range.
const TINY: f64 = 5e-324;

/// A value with what is known about its accuracy: a running bound on the
/// rounding error (first order, Wilkinson's running error analysis: each
/// operation adds its own rounding to the errors of its operands carried
/// through it; common practice) and the size of the terms it was summed
/// from (sums add the sizes of their operands, products multiply them;
/// roots, reciprocals and powers start afresh from their value). A value
/// much smaller than its terms was cancelled; a value whose rounding bound
/// is not small against it is not known.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Bounded {
    pub value: f64,
    /// Bound on |computed - exact| from rounding (infinite when an
    /// intermediate result overflowed).
    pub rounding: f64,
    /// Size of the terms, ≥ |value|.
    pub scale: f64,
    /// Some intermediate result fell below the normal range of f64
    /// (its exact value was not 0).
    pub underflow: bool,
    /// Some intermediate result was infinite.
    pub overflow: bool,
}

#[derive(Default)]
struct Loss {
    underflow: bool,
    overflow: bool,
}

/// Runs `code` as [`run`] does, carrying a rounding bound `err` and a term
/// size `mag` per register.
fn run_bounded(
    code: &[Instr],
    regs: &mut [f64],
    err: &mut [f64],
    mag: &mut [f64],
    dim: usize,
    loss: &mut Loss,
) -> std::result::Result<(), Fault> {
    for ins in code {
        let (v, e, m, exact_nonzero) = match ins.op {
            Op::Add(a, b) | Op::Sub(a, b) => {
                let (x, y) = (regs[a as usize], regs[b as usize]);
                let v = if matches!(ins.op, Op::Add(..)) {
                    x + y
                } else {
                    x - y
                };
                // A sum of floats that is subnormal is exact.
                (
                    v,
                    err[a as usize] + err[b as usize] + EPS * v.abs(),
                    mag[a as usize] + mag[b as usize],
                    false,
                )
            }
            Op::Mul(a, b) => {
                let (x, y) = (regs[a as usize], regs[b as usize]);
                let (ex, ey) = (err[a as usize], err[b as usize]);
                let v = x * y;
                let e = x.abs() * ey + y.abs() * ex + ex * ey + EPS * v.abs();
                (
                    v,
                    e,
                    mag[a as usize] * mag[b as usize],
                    x != 0.0 && y != 0.0,
                )
            }
            Op::Dist2 {
                p,
                q,
                p_wall,
                q_wall,
            } => {
                let (p, q) = (p as usize, q as usize);
                let v = dist2(regs, p, q, dim, p_wall, q_wall);
                // Each difference and square rounds once, the sum dim times.
                let e = (dim as f64 + 3.0) * EPS * v;
                (v, e, v, false)
            }
            Op::Sqrt(a) => {
                let x = regs[a as usize];
                if x < 0.0 {
                    return Err(Fault(*ins));
                }
                let v = x.sqrt();
                let ex = err[a as usize];
                let carried = if x > 0.0 {
                    (ex / v).min(ex.sqrt())
                } else {
                    ex.sqrt()
                };
                (v, carried + EPS * v, v, false)
            }
            Op::Recip(a) => {
                let x = regs[a as usize];
                if x == 0.0 {
                    return Err(Fault(*ins));
                }
                let v = 1.0 / x;
                let ex = err[a as usize];
                let carried = if ex < x.abs() {
                    ex / (x.abs() * (x.abs() - ex))
                } else {
                    f64::INFINITY
                };
                (v, carried + EPS * v.abs(), v.abs(), true)
            }
            Op::Pow(a, b) => {
                let (x, y) = (regs[a as usize], regs[b as usize]);
                if x <= 0.0 && ((x == 0.0 && y < 0.0) || (x < 0.0 && y.fract() != 0.0)) {
                    return Err(Fault(*ins));
                }
                let v = x.powf(y);
                let (ex, ey) = (err[a as usize], err[b as usize]);
                // d(x^y) = x^y (y dx/x + ln|x| dy); powf is within a few ulps.
                let relative = if x == 0.0 {
                    if ex == 0.0 {
                        0.0
                    } else {
                        f64::INFINITY
                    }
                } else if ex < x.abs() {
                    // Both ends of [x - ex, x + ex] for large exponents.
                    let lo = ((x.abs() - ex) / x.abs()).powf(y);
                    let hi = ((x.abs() + ex) / x.abs()).powf(y);
                    (lo - 1.0).abs().max((hi - 1.0).abs())
                } else {
                    f64::INFINITY
                };
                let e = v.abs() * (relative + x.abs().ln().abs() * ey + 4.0 * EPS);
                (v, e, v.abs(), x != 0.0)
            }
            Op::Hyp { a, b, c, z, k } => {
                let args = [a, b, c, z].map(|r| regs[r as usize]);
                let errs = [a, b, c, z].map(|r| err[r as usize]);
                let (v, e) = hyp_bounded(args, errs, k).map_err(|_| Fault(*ins))?;
                (v, e, v.abs(), v != 0.0)
            }
        };
        if !v.is_finite() {
            loss.overflow = true;
        }
        let mut e = e;
        if exact_nonzero && v.abs() < f64::MIN_POSITIVE {
            // Below the normal range only absolute accuracy is left.
            loss.underflow = true;
            e += TINY;
        }
        let out = ins.out as usize;
        regs[out] = v;
        err[out] = if e.is_nan() || !v.is_finite() {
            f64::INFINITY
        } else {
            e
        };
        mag[out] = if m.is_nan() { f64::INFINITY } else { m };
    }
    Ok(())
}

/// Runs `code` on `regs`. Stops at the first operation without a real
/// value.
pub(super) fn run(code: &[Instr], regs: &mut [f64], dim: usize) -> std::result::Result<(), Fault> {
    for ins in code {
        let v = match ins.op {
            Op::Add(a, b) => regs[a as usize] + regs[b as usize],
            Op::Sub(a, b) => regs[a as usize] - regs[b as usize],
            Op::Mul(a, b) => regs[a as usize] * regs[b as usize],
            Op::Dist2 {
                p,
                q,
                p_wall,
                q_wall,
            } => dist2(regs, p as usize, q as usize, dim, p_wall, q_wall),
            Op::Sqrt(a) => {
                let x = regs[a as usize];
                if x < 0.0 {
                    return Err(Fault(*ins));
                }
                x.sqrt()
            }
            Op::Recip(a) => {
                let x = regs[a as usize];
                if x == 0.0 {
                    return Err(Fault(*ins));
                }
                1.0 / x
            }
            Op::Pow(a, b) => {
                let (x, e) = (regs[a as usize], regs[b as usize]);
                if x <= 0.0 && ((x == 0.0 && e < 0.0) || (x < 0.0 && e.fract() != 0.0)) {
                    return Err(Fault(*ins));
                }
                x.powf(e)
            }
            Op::Hyp { a, b, c, z, k } => {
                let x = |r: Reg| regs[r as usize];
                hyp(x(a), x(b), x(c), x(z), k).map_err(|_| Fault(*ins))?
            }
        };
        regs[ins.out as usize] = v;
    }
    Ok(())
}

#[inline]
pub(super) fn dist2(
    regs: &[f64],
    p: usize,
    q: usize,
    dim: usize,
    p_wall: bool,
    q_wall: bool,
) -> f64 {
    let last = dim - 1;
    let (a, b) = (&regs[p..p + last], &regs[q..q + last]);
    let mut s = 0.0;
    for (x, y) in a.iter().zip(b) {
        let d = x - y;
        s += d * d;
    }
    let x = if p_wall { 0.0 } else { regs[p + last] };
    let y = if q_wall { 0.0 } else { regs[q + last] };
    s + (x - y) * (x - y)
}

/// The k-th derivative in z of ₂F₁(a, b; c; z):
/// (a)_k (b)_k/(c)_k ₂F₁(a + k, b + k; c + k; z) (DLMF 15.5.2).
pub(super) fn hyp(
    a: f64,
    b: f64,
    c: f64,
    z: f64,
    k: u32,
) -> std::result::Result<f64, crate::numeric::special::SpecialError> {
    use crate::numeric::special::{hyp2f1, SpecialError};
    let mut factor = 1.0;
    for j in 0..k {
        let j = f64::from(j);
        if c + j == 0.0 {
            return Err(SpecialError::ParameterPole);
        }
        factor *= (a + j) * (b + j) / (c + j);
    }
    if factor == 0.0 {
        return Ok(0.0);
    }
    let k = f64::from(k);
    let v = factor * hyp2f1(a + k, b + k, c + k, z)?;
    if v.is_finite() {
        Ok(v)
    } else {
        Err(SpecialError::Overflow)
    }
}

/// Relative accuracy taken for ₂F₁ itself (its module's measured worst
/// case, tests/special.rs).
const HYP_ACCURACY: f64 = 1e-13;

/// ₂F₁^(k) with a bound on its error: its own accuracy, and the errors of
/// its arguments carried through its derivatives (in z exactly, in the
/// parameters by a difference quotient). A derivative that has no value
/// makes the bound infinite.
pub(super) fn hyp_bounded(
    [a, b, c, z]: [f64; 4],
    [ea, eb, ec, ez]: [f64; 4],
    k: u32,
) -> std::result::Result<(f64, f64), crate::numeric::special::SpecialError> {
    let v = hyp(a, b, c, z, k)?;
    let mut e = HYP_ACCURACY * v.abs() + 4.0 * EPS * v.abs();
    if ez > 0.0 {
        e += match hyp(a, b, c, z, k + 1) {
            Ok(dz) => dz.abs() * ez,
            Err(_) => f64::INFINITY,
        };
    }
    for (slot, err) in [(0, ea), (1, eb), (2, ec)] {
        if err == 0.0 {
            continue;
        }
        let mut p = [a, b, c];
        let h = 1e-6 * p[slot].abs().max(1.0);
        p[slot] += h;
        let slope = match hyp(p[0], p[1], p[2], z, k) {
            Ok(w) => ((w - v) / h).abs() * 2.0 + HYP_ACCURACY * (w.abs() + v.abs()) / h,
            Err(_) => f64::INFINITY,
        };
        e += slope * err;
    }
    Ok((v, e))
}
