//! Batched evaluation: one point and, optionally, one parameter tensor
//! moving through many values at once — the inner loop of quadrature,
//! where the integration point and the outward normal change at every
//! node.
//!
//! [`Program::batch`] loads every other input and runs the code that does
//! not depend on the moving ones once. What is left runs instruction by
//! instruction over a block of [`LANES`] nodes: each register that moves
//! holds one value per node (a lane), each one that does not is read as a
//! scalar, so the dispatch of an instruction is paid once per block and
//! the arithmetic runs in tight loops the compiler vectorises. An
//! operation that fails, or a value that is not finite, in a block sends
//! that block through [`Program::eval`] node by node, which words the
//! error exactly as the one-node path does.

use super::program::{hyp, run, Input, Instr, Op, Program, Reg};
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::numeric::Values;

/// Nodes per block.
pub const LANES: usize = 64;

/// Where an operand lives: a lane slot (one value per node) or a scalar
/// register.
#[derive(Clone, Copy, Debug)]
enum Arg {
    Lane(u32),
    Scalar(u32),
}

/// One instruction of the moving code: `out` is a lane slot.
#[derive(Clone, Copy, Debug)]
enum LaneOp {
    Add(Arg, Arg),
    Sub(Arg, Arg),
    Mul(Arg, Arg),
    /// |p - q|² between coordinate blocks, one of them moving.
    Dist2 {
        p: Arg,
        q: Arg,
        p_wall: bool,
        q_wall: bool,
    },
    Sqrt(Arg),
    Recip(Arg),
    Pow(Arg, Arg),
    Hyp {
        args: [Arg; 4],
        k: u32,
    },
}

/// A program with one point (and one tensor) moving: see the module
/// documentation. Build it with [`Program::batch`]; evaluate with
/// [`Batch::eval`].
pub struct Batch<'p> {
    program: &'p Program,
    values: Values,
    point: String,
    tensor: Option<String>,
    /// The register file after loading and the invariant code.
    scalars: Vec<f64>,
    code: Vec<(LaneOp, u32)>,
    /// Lane slots of the point's coordinates and of the tensor's
    /// components, if the code reads them.
    point_slot: Option<u32>,
    tensor_slot: Option<(u32, usize)>,
    slots: usize,
    output: Arg,
}

impl Program {
    /// The program with `point` and, if given, the parameter tensor
    /// `tensor` (rank one: d components) moving; every other input from
    /// `values`. The code that reads neither runs here, once.
    pub fn batch<'p>(
        &'p self,
        values: &Values,
        point: &str,
        tensor: Option<&str>,
    ) -> Result<Batch<'p>> {
        if !self.declared.iter().any(|p| p == point) {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!("no point named {point} is declared"),
            ));
        }
        let dim = self.dim;
        let mut skip = vec![point];
        skip.extend(tensor);
        let mut scalars = self.template.clone();
        self.load(values, &mut scalars, &skip)?;
        // Lane slots for the moving inputs.
        let mut lane: Vec<Option<u32>> = vec![None; self.template.len()];
        let mut slots = 0u32;
        let (mut point_slot, mut tensor_slot) = (None, None);
        for input in &self.inputs {
            match input {
                Input::Point { name, base } if name == point => {
                    point_slot = Some(slots);
                    for k in 0..dim {
                        lane[*base as usize + k] = Some(slots);
                        slots += 1;
                    }
                }
                Input::Tensor {
                    name, base, rank, ..
                } if Some(name.as_str()) == tensor => {
                    let len = dim.pow(*rank as u32);
                    if *rank != 1 {
                        return Err(Error::new(
                            ErrorKind::Numeric,
                            format!("the moving parameter {name} must have one index"),
                        ));
                    }
                    tensor_slot = Some((slots, len));
                    for k in 0..len {
                        lane[*base as usize + k] = Some(slots);
                        slots += 1;
                    }
                }
                _ => {}
            }
        }
        // Split the code: what reads a lane moves, the rest runs now.
        let mut invariant: Vec<Instr> = Vec::new();
        let mut moving: Vec<Instr> = Vec::new();
        for ins in &self.code {
            let mut moves = false;
            let blocks = ins.op.blocks();
            ins.op.operands(|r| {
                let n = if blocks { dim } else { 1 };
                moves |= (0..n).any(|k| lane[r as usize + k].is_some());
            });
            if moves {
                lane[ins.out as usize] = Some(slots);
                slots += 1;
                moving.push(*ins);
            } else {
                invariant.push(*ins);
            }
        }
        run(&invariant, &mut scalars, dim).map_err(|f| self.fault(&f, &scalars, None))?;
        let arg = |r: Reg| match lane[r as usize] {
            Some(s) => Arg::Lane(s),
            None => Arg::Scalar(r),
        };
        let code = moving
            .iter()
            .map(|ins| {
                let op = match ins.op {
                    Op::Add(a, b) => LaneOp::Add(arg(a), arg(b)),
                    Op::Sub(a, b) => LaneOp::Sub(arg(a), arg(b)),
                    Op::Mul(a, b) => LaneOp::Mul(arg(a), arg(b)),
                    Op::Dist2 {
                        p,
                        q,
                        p_wall,
                        q_wall,
                    } => LaneOp::Dist2 {
                        p: arg(p),
                        q: arg(q),
                        p_wall,
                        q_wall,
                    },
                    Op::Sqrt(a) => LaneOp::Sqrt(arg(a)),
                    Op::Recip(a) => LaneOp::Recip(arg(a)),
                    Op::Pow(a, b) => LaneOp::Pow(arg(a), arg(b)),
                    Op::Hyp { a, b, c, z, k } => LaneOp::Hyp {
                        args: [arg(a), arg(b), arg(c), arg(z)],
                        k,
                    },
                };
                let out = lane[ins.out as usize].expect("moving code writes a lane");
                (op, out)
            })
            .collect();
        Ok(Batch {
            program: self,
            values: values.clone(),
            point: point.to_string(),
            tensor: tensor.map(str::to_string),
            scalars,
            code,
            point_slot,
            tensor_slot,
            slots: slots as usize,
            output: arg(self.output),
        })
    }
}

impl Batch<'_> {
    /// The values with the point at each of `points` (d coordinates each,
    /// flat) and the tensor at the matching entry of `tensors` (d each;
    /// ignored without a moving tensor), into `out` (one per point).
    pub fn eval(&self, points: &[f64], tensors: &[f64], out: &mut [f64]) -> Result<()> {
        let dim = self.program.dim;
        let count = out.len();
        if points.len() != count * dim || (self.tensor.is_some() && tensors.len() != count * dim) {
            return Err(Error::new(
                ErrorKind::Numeric,
                format!(
                    "{} coordinates and {} tensor components for {count} nodes in dimension {dim}",
                    points.len(),
                    tensors.len()
                ),
            ));
        }
        let mut lanes = vec![0.0; self.slots * LANES];
        for start in (0..count).step_by(LANES) {
            let n = LANES.min(count - start);
            if let Some(slot) = self.point_slot {
                fill(
                    &mut lanes,
                    slot,
                    dim,
                    &points[start * dim..(start + n) * dim],
                );
            }
            if let Some((slot, len)) = self.tensor_slot {
                fill(
                    &mut lanes,
                    slot,
                    len,
                    &tensors[start * len..(start + n) * len],
                );
            }
            let ok = self.run(&mut lanes, n);
            let block = &mut out[start..start + n];
            match self.output {
                Arg::Lane(s) => {
                    let s = s as usize * LANES;
                    block.copy_from_slice(&lanes[s..s + n]);
                }
                Arg::Scalar(r) => block.fill(self.scalars[r as usize]),
            }
            if !ok || block.iter().any(|v| !v.is_finite()) {
                self.one_by_one(start, points, tensors, block)?;
            }
        }
        Ok(())
    }

    /// The block from `start` through [`Program::eval`], for its error.
    fn one_by_one(
        &self,
        start: usize,
        points: &[f64],
        tensors: &[f64],
        block: &mut [f64],
    ) -> Result<()> {
        let dim = self.program.dim;
        let mut values = self.values.clone();
        for (k, v) in block.iter_mut().enumerate() {
            let at = (start + k) * dim;
            values
                .points
                .insert(self.point.clone(), points[at..at + dim].to_vec());
            if let Some(t) = &self.tensor {
                values
                    .tensors
                    .insert(t.clone(), tensors[at..at + dim].to_vec());
            }
            *v = self.program.eval(&values)?;
        }
        Ok(())
    }

    /// Runs the moving code on the first `n` lanes; false if an operation
    /// had no real value in some lane.
    fn run(&self, lanes: &mut [f64], n: usize) -> bool {
        let s = &self.scalars;
        let mut ok = true;
        for &(op, out) in &self.code {
            let o = out as usize * LANES;
            // The output slot is never an operand of its own instruction.
            let (lo, rest) = lanes.split_at_mut(o);
            let (dst, hi) = rest.split_at_mut(LANES);
            let dst = &mut dst[..n];
            let get = |a: Arg| -> Src<'_> {
                match a {
                    Arg::Scalar(r) => Src::Scalar(s[r as usize]),
                    Arg::Lane(l) => {
                        let l = l as usize * LANES;
                        Src::Lane(if l < o {
                            &lo[l..l + n]
                        } else {
                            let l = l - o - LANES;
                            &hi[l..l + n]
                        })
                    }
                }
            };
            match op {
                LaneOp::Add(a, b) => binary(dst, get(a), get(b), |x, y| x + y),
                LaneOp::Sub(a, b) => binary(dst, get(a), get(b), |x, y| x - y),
                LaneOp::Mul(a, b) => binary(dst, get(a), get(b), |x, y| x * y),
                LaneOp::Sqrt(a) => {
                    unary(dst, get(a), f64::sqrt);
                    ok &= dst.iter().all(|v| !v.is_nan());
                }
                LaneOp::Recip(a) => {
                    unary(dst, get(a), |x| 1.0 / x);
                    ok &= dst.iter().all(|v| v.is_finite());
                }
                LaneOp::Pow(a, b) => {
                    let (x, e) = (get(a), get(b));
                    for (k, d) in dst.iter_mut().enumerate() {
                        let (x, e) = (x.at(k), e.at(k));
                        if x <= 0.0 && ((x == 0.0 && e < 0.0) || (x < 0.0 && e.fract() != 0.0)) {
                            ok = false;
                        }
                        *d = x.powf(e);
                    }
                }
                LaneOp::Dist2 {
                    p,
                    q,
                    p_wall,
                    q_wall,
                } => {
                    let dim = self.program.dim;
                    let coord = |a: Arg, i: usize| -> Src<'_> {
                        match a {
                            Arg::Scalar(r) => Src::Scalar(s[r as usize + i]),
                            Arg::Lane(l) => get(Arg::Lane(l + i as u32)),
                        }
                    };
                    dst.fill(0.0);
                    for i in 0..dim {
                        let wall = i == dim - 1;
                        let x = if wall && p_wall {
                            Src::Scalar(0.0)
                        } else {
                            coord(p, i)
                        };
                        let y = if wall && q_wall {
                            Src::Scalar(0.0)
                        } else {
                            coord(q, i)
                        };
                        accumulate(dst, x, y);
                    }
                }
                LaneOp::Hyp { args, k } => {
                    let args = args.map(get);
                    for (j, d) in dst.iter_mut().enumerate() {
                        let [a, b, c, z] = [0, 1, 2, 3].map(|i| args[i].at(j));
                        match hyp(a, b, c, z, k) {
                            Ok(v) => *d = v,
                            Err(_) => {
                                ok = false;
                                *d = f64::NAN;
                            }
                        }
                    }
                }
            }
            if !ok {
                return false;
            }
        }
        true
    }
}

/// An operand over a block: one value per lane, or the same for all.
#[derive(Clone, Copy)]
enum Src<'a> {
    Lane(&'a [f64]),
    Scalar(f64),
}

impl Src<'_> {
    #[inline]
    fn at(&self, k: usize) -> f64 {
        match self {
            Src::Lane(v) => v[k],
            Src::Scalar(x) => *x,
        }
    }
}

#[inline]
fn binary(dst: &mut [f64], a: Src<'_>, b: Src<'_>, f: impl Fn(f64, f64) -> f64) {
    match (a, b) {
        (Src::Lane(x), Src::Lane(y)) => {
            for ((d, x), y) in dst.iter_mut().zip(x).zip(y) {
                *d = f(*x, *y);
            }
        }
        (Src::Lane(x), Src::Scalar(y)) => {
            for (d, x) in dst.iter_mut().zip(x) {
                *d = f(*x, y);
            }
        }
        (Src::Scalar(x), Src::Lane(y)) => {
            for (d, y) in dst.iter_mut().zip(y) {
                *d = f(x, *y);
            }
        }
        (Src::Scalar(x), Src::Scalar(y)) => dst.fill(f(x, y)),
    }
}

#[inline]
fn unary(dst: &mut [f64], a: Src<'_>, f: impl Fn(f64) -> f64) {
    match a {
        Src::Lane(x) => {
            for (d, x) in dst.iter_mut().zip(x) {
                *d = f(*x);
            }
        }
        Src::Scalar(x) => dst.fill(f(x)),
    }
}

/// dst += (x - y)².
#[inline]
fn accumulate(dst: &mut [f64], x: Src<'_>, y: Src<'_>) {
    match (x, y) {
        (Src::Lane(x), Src::Lane(y)) => {
            for ((d, x), y) in dst.iter_mut().zip(x).zip(y) {
                *d += (x - y) * (x - y);
            }
        }
        (Src::Lane(x), Src::Scalar(y)) | (Src::Scalar(y), Src::Lane(x)) => {
            for (d, x) in dst.iter_mut().zip(x) {
                *d += (x - y) * (x - y);
            }
        }
        (Src::Scalar(x), Src::Scalar(y)) => {
            for d in dst.iter_mut() {
                *d += (x - y) * (x - y);
            }
        }
    }
}

/// Copies `n` nodes of `width` values each (flat, node-major) into the
/// slots from `slot` on (slot-major, [`LANES`] per slot).
fn fill(lanes: &mut [f64], slot: u32, width: usize, src: &[f64]) {
    for (k, node) in src.chunks_exact(width).enumerate() {
        for (i, v) in node.iter().enumerate() {
            lanes[(slot as usize + i) * LANES + k] = *v;
        }
    }
}
