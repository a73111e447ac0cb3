//! From an explicit term to a [`Program`].
//!
//! One walk over the term with the values of the indices in scope: summed
//! indices are unrolled where they are contracted (each group of factors
//! that share summed indices is summed on its own, the other factors stay
//! outside the sum), numbers, `d`, Kronecker deltas and normals fold to
//! constants, and every operation is hash-consed, so equal subexpressions —
//! each distance, each power of an atom — are computed once. Distances are
//! kept squared: |p - q|^a is (|p - q|²)^(a/2); whole and half-integer
//! exponents become multiplications, reciprocals and square roots, and
//! powers of one base whose exponents differ by a whole number share one
//! call to `powf`. Dead code is dropped at the end, and for each point the
//! code is split into the part that depends on it and the part that does
//! not.

use std::collections::BTreeMap;

use rustc_hash::FxHashMap as HashMap;
use std::rc::Rc;

use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use super::program::{Input, Instr, Moving, Op, Program, Reg, NO_ORIGIN};
use crate::context::{Context, IndexKind, DIMENSION};
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::term::print::{Printer, Style};
use crate::term::{Index, Point, Term};

/// Most registers a program may use: unrolling many summed indices in a
/// high dimension would otherwise exhaust memory.
const MAX_REGISTERS: usize = 1 << 22;
/// Most products that unrolling summed indices may write.
const MAX_UNROLLED: usize = 1 << 20;
/// Largest whole exponent written as multiplications.
const MAX_REPEATED: i64 = 1 << 16;
/// Longest printed subterm quoted in an error.
const MAX_QUOTE: usize = 80;

/// A value while compiling: a known constant, or a register.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Val {
    Const(f64),
    Reg(Reg),
}

/// Values of the indices in scope; the last binding of a name wins.
type Env = Vec<(String, usize)>;

/// Compiles `term` for dimension `dim` with the free indices set by `free`.
pub(super) fn compile(
    ctx: &Context,
    term: &Term,
    free: &[(String, usize)],
    dim: usize,
) -> Result<Program> {
    if dim == 0 {
        return Err(numeric("the dimension must be at least 1"));
    }
    if let Some(Term::Num(n)) = &ctx.dimension {
        if n.to_usize() != Some(dim) {
            return Err(numeric(format!(
                "the file declares dimension {n}, the program is compiled for dimension {dim}"
            )));
        }
    }
    let mut b = Builder::new(ctx, dim);
    for (name, v) in free {
        let range = b.range(name);
        if *v >= range {
            let kind = match ctx.index_kind(name) {
                IndexKind::Bulk => "",
                IndexKind::Parallel => "parallel ",
            };
            return Err(Error::new(
                ErrorKind::Index,
                format!("the {kind}index {name} runs over 0..{range}; it cannot be {v}"),
            ));
        }
    }
    for name in b.free(term)?.iter() {
        if !free.iter().any(|(n, _)| n == name) {
            return Err(Error::new(
                ErrorKind::Index,
                format!("the free index {name} has no value"),
            )
            .with_note("give its value in `free`"));
        }
    }
    let mut env: Env = free.to_vec();
    let out = b.term(term, &mut env)?;
    b.finish(out)
}

fn numeric(message: impl Into<String>) -> Error {
    Error::new(ErrorKind::Numeric, message)
}

fn to_f64(c: &BigRational) -> Result<f64> {
    match c.to_f64() {
        Some(x) if x.is_finite() => Ok(x),
        _ => Err(numeric(format!(
            "the number {c} is out of the range of floating point"
        ))),
    }
}

/// Named indices that occur exactly once in `all`, sorted; an index may
/// occur at most twice.
fn once(all: Vec<String>) -> Result<Rc<[String]>> {
    let counts = counts(&all)?;
    Ok(counts
        .into_iter()
        .filter(|(_, n)| *n == 1)
        .map(|(s, _)| s.to_string())
        .collect())
}

/// Named indices that occur twice in `all`: summed there.
fn twice<'s>(all: impl IntoIterator<Item = &'s String>) -> Result<Vec<String>> {
    let all: Vec<String> = all.into_iter().cloned().collect();
    Ok(counts(&all)?
        .into_iter()
        .filter(|(_, n)| *n == 2)
        .map(|(s, _)| s.to_string())
        .collect())
}

fn counts(all: &[String]) -> Result<BTreeMap<&str, usize>> {
    let mut counts: BTreeMap<&str, usize> = BTreeMap::new();
    for s in all {
        *counts.entry(s).or_insert(0) += 1;
    }
    if let Some((s, n)) = counts.iter().find(|(_, n)| **n > 2) {
        return Err(Error::new(
            ErrorKind::Index,
            format!("the index {s} occurs {n} times in one product"),
        ));
    }
    Ok(counts)
}

fn names(idx: &[Index]) -> Vec<String> {
    idx.iter()
        .filter_map(|i| i.name().map(String::from))
        .collect()
}

struct Builder<'c> {
    ctx: &'c Context,
    dim: usize,
    /// Register file: constants in place.
    template: Vec<f64>,
    /// The points (one bit per declaration rank) each register depends on.
    masks: Vec<u64>,
    code: Vec<Instr>,
    memo: HashMap<Op, Reg>,
    consts: HashMap<u64, Reg>,
    inputs: Vec<Input>,
    scalars: HashMap<String, Reg>,
    tensors: HashMap<String, (Reg, usize)>,
    points: HashMap<String, Reg>,
    /// For a base and the fractional part of an exponent: the first such
    /// power written, so that others are a whole power times it.
    classes: HashMap<(Reg, BigRational), (BigRational, Reg)>,
    /// Free indices of subterms, by address (the term outlives the build);
    /// leaves are not remembered (they are cheaper to look at again).
    frees: HashMap<usize, Rc<[String]>>,
    /// No free index, shared.
    none: Rc<[String]>,
    origins: Vec<String>,
    origin_of: HashMap<usize, u32>,
    /// The same, by value: equal subterms at other addresses are printed
    /// once.
    origin_by_value: HashMap<Term, u32>,
    /// The subterm instructions are being written for.
    origin: u32,
    unrolled: usize,
}

impl<'c> Builder<'c> {
    fn new(ctx: &'c Context, dim: usize) -> Builder<'c> {
        Builder {
            ctx,
            dim,
            template: Vec::new(),
            masks: Vec::new(),
            code: Vec::new(),
            memo: HashMap::default(),
            consts: HashMap::default(),
            inputs: Vec::new(),
            scalars: HashMap::default(),
            tensors: HashMap::default(),
            points: HashMap::default(),
            classes: HashMap::default(),
            frees: HashMap::default(),
            none: Rc::from([]),
            origins: Vec::new(),
            origin_of: HashMap::default(),
            origin_by_value: HashMap::default(),
            origin: NO_ORIGIN,
            unrolled: 0,
        }
    }

    // ───────────── registers and instructions ─────────────

    fn alloc(&mut self, n: usize, mask: u64) -> Result<Reg> {
        let start = self.template.len();
        if start + n > MAX_REGISTERS {
            return Err(numeric(format!(
                "the program would need more than {MAX_REGISTERS} registers"
            ))
            .with_note("too many summed indices are unrolled in this dimension"));
        }
        self.template.resize(start + n, 0.0);
        self.masks.resize(start + n, mask);
        Ok(start as Reg)
    }

    fn constant(&mut self, x: f64) -> Result<Reg> {
        if let Some(r) = self.consts.get(&x.to_bits()) {
            return Ok(*r);
        }
        let r = self.alloc(1, 0)?;
        self.template[r as usize] = x;
        self.consts.insert(x.to_bits(), r);
        Ok(r)
    }

    fn reg(&mut self, v: Val) -> Result<Reg> {
        match v {
            Val::Const(x) => self.constant(x),
            Val::Reg(r) => Ok(r),
        }
    }

    fn emit(&mut self, op: Op) -> Result<Reg> {
        let op = match op {
            Op::Add(a, b) if b < a => Op::Add(b, a),
            Op::Mul(a, b) if b < a => Op::Mul(b, a),
            op => op,
        };
        if let Some(r) = self.memo.get(&op) {
            return Ok(*r);
        }
        let mut mask = 0;
        op.operands(|r| mask |= self.masks[r as usize]);
        let out = self.alloc(1, mask)?;
        self.code.push(Instr {
            op,
            out,
            origin: self.origin,
        });
        self.memo.insert(op, out);
        Ok(out)
    }

    /// Orders the operands of a chain of sums or products so that those
    /// involving the first declared point come last, and before them those
    /// involving the second, and so on: when the first point moves (in a
    /// file, typically the integration point) the rest of the chain is an
    /// invariant prefix, computed once by [`Program::eval_many`].
    fn order(&self, regs: &mut [Reg]) {
        regs.sort_by_key(|r| (self.masks[*r as usize].reverse_bits(), *r));
    }

    fn chain(&mut self, mut regs: Vec<Reg>, op: fn(Reg, Reg) -> Op) -> Result<Option<Reg>> {
        self.order(&mut regs);
        let mut it = regs.into_iter();
        let Some(mut acc) = it.next() else {
            return Ok(None);
        };
        for r in it {
            acc = self.emit(op(acc, r))?;
        }
        Ok(Some(acc))
    }

    /// Σ pos - Σ neg.
    fn sum(&mut self, pos: Vec<Val>, neg: Vec<Val>) -> Result<Val> {
        let mut c = 0.0;
        let mut split = |vals: Vec<Val>, sign: f64| {
            let mut regs = Vec::new();
            for v in vals {
                match v {
                    Val::Const(x) => c += sign * x,
                    Val::Reg(r) => regs.push(r),
                }
            }
            regs
        };
        let mut p = split(pos, 1.0);
        let n = split(neg, -1.0);
        if c != 0.0 {
            p.push(self.constant(c)?);
        }
        let p = self.chain(p, Op::Add)?;
        let n = self.chain(n, Op::Add)?;
        Ok(match (p, n) {
            (None, None) => Val::Const(c),
            (Some(p), None) => Val::Reg(p),
            (Some(p), Some(n)) => Val::Reg(self.emit(Op::Sub(p, n))?),
            (None, Some(n)) => {
                let m = self.constant(-1.0)?;
                Val::Reg(self.emit(Op::Mul(m, n))?)
            }
        })
    }

    /// The product of `vals`, negated if `negate`.
    fn product(&mut self, vals: Vec<Val>, negate: bool) -> Result<Val> {
        let mut c = if negate { -1.0 } else { 1.0 };
        let mut regs = Vec::new();
        for v in vals {
            match v {
                Val::Const(x) => c *= x,
                Val::Reg(r) => regs.push(r),
            }
        }
        if c == 0.0 || regs.is_empty() {
            // An exact zero factor makes the product zero.
            return Ok(Val::Const(c));
        }
        if c != 1.0 {
            regs.push(self.constant(c)?);
        }
        Ok(self.chain(regs, Op::Mul)?.map_or(Val::Const(c), Val::Reg))
    }

    fn mul(&mut self, a: Val, b: Val) -> Result<Val> {
        self.product(vec![a, b], false)
    }

    // ───────────── powers ─────────────

    /// base^q for an exact exponent.
    fn pow_exact(&mut self, base: Val, q: &BigRational) -> Result<Val> {
        if q.is_zero() {
            return Ok(Val::Const(1.0));
        }
        if q.is_one() {
            return Ok(base);
        }
        let e = to_f64(q)?;
        let b = match base {
            Val::Const(x) => return self.fold_pow(x, e).map(Val::Const),
            Val::Reg(b) => b,
        };
        if let Some(n) = q.is_integer().then(|| q.to_i64()).flatten() {
            if n.abs() <= MAX_REPEATED {
                return self.int_pow(b, n);
            }
        }
        let floor = q.floor();
        let frac = q - &floor;
        let quarters = &frac * BigRational::from_integer(4.into());
        if quarters.is_integer() {
            let quarters = quarters.to_integer().to_i64().unwrap_or(0);
            if let Some(n) = floor.to_i64().filter(|n| n.abs() <= MAX_REPEATED) {
                // b^(n + k/4) = b^n · √b^(k/2) · √√b^(k%2): square roots
                // instead of a call to powf.
                let root = self.emit(Op::Sqrt(b))?;
                let mut factors = vec![self.int_pow(b, n)?];
                if quarters >= 2 {
                    factors.push(Val::Reg(root));
                }
                if quarters % 2 == 1 {
                    factors.push(Val::Reg(self.emit(Op::Sqrt(root))?));
                }
                return self.product(factors, false);
            }
        }
        if let Some((q0, r0)) = self.classes.get(&(b, frac.clone())).cloned() {
            // b^q = b^q0 · b^(q - q0). A negative whole power divides by b,
            // which only loses a value when b^q itself has none (q < 0).
            let k = (q - &q0).to_integer().to_i64();
            if let Some(k) = k.filter(|k| k.abs() <= MAX_REPEATED && (*k > 0 || e < 0.0)) {
                let whole = self.int_pow(b, k)?;
                return self.mul(Val::Reg(r0), whole);
            }
        }
        let er = self.constant(e)?;
        let r = self.emit(Op::Pow(b, er))?;
        self.classes.entry((b, frac)).or_insert((q.clone(), r));
        Ok(Val::Reg(r))
    }

    /// b^n for a whole n: repeated squaring, 1/b for negative n.
    fn int_pow(&mut self, b: Reg, n: i64) -> Result<Val> {
        if n == 0 {
            return Ok(Val::Const(1.0));
        }
        if n < 0 {
            let inv = self.emit(Op::Recip(b))?;
            return self.int_pow(inv, -n);
        }
        if n == 1 {
            return Ok(Val::Reg(b));
        }
        let half = self.int_pow(b, n / 2)?;
        let square = self.mul(half, half)?;
        if n % 2 == 1 {
            self.mul(square, Val::Reg(b))
        } else {
            Ok(square)
        }
    }

    /// base^e for an exponent known only as a value.
    fn pow_val(&mut self, base: Val, e: Val) -> Result<Val> {
        match e {
            Val::Const(x) => match BigRational::from_float(x) {
                Some(q) => self.pow_exact(base, &q),
                None => Err(numeric(format!("the exponent {x} is not a number"))),
            },
            Val::Reg(e) => {
                let b = self.reg(base)?;
                Ok(Val::Reg(self.emit(Op::Pow(b, e))?))
            }
        }
    }

    /// x^e for constants, with the checks the program makes at run time.
    fn fold_pow(&self, x: f64, e: f64) -> Result<f64> {
        let why = if x == 0.0 && e < 0.0 {
            "division by zero".to_string()
        } else if x < 0.0 && e.fract() != 0.0 {
            format!("{x} to the power {e} is not real")
        } else {
            let v = x.powf(e);
            if v.is_finite() {
                return Ok(v);
            }
            format!("{x} to the power {e} overflows")
        };
        let what = self
            .origins
            .get(self.origin as usize)
            .map_or(String::new(), |s| format!("{s}: "));
        Err(numeric(format!("cannot evaluate {what}{why}")))
    }

    // ───────────── inputs ─────────────

    fn bit(&self, p: &Point) -> u64 {
        let rank = self.ctx.point(&p.name).map_or(p.rank, |(r, _)| r);
        1u64 << rank.min(63)
    }

    fn point(&mut self, p: &Point) -> Result<Reg> {
        if let Some(r) = self.points.get(&*p.name) {
            return Ok(*r);
        }
        if p.is_origin() {
            // Zeros, read from no input.
            let base = self.alloc(self.dim, 0)?;
            self.points.insert(p.name.to_string(), base);
            return Ok(base);
        }
        let base = self.alloc(self.dim, self.bit(p))?;
        self.points.insert(p.name.to_string(), base);
        self.inputs.push(Input::Point {
            name: p.name.to_string(),
            base,
        });
        Ok(base)
    }

    fn scalar(&mut self, name: &str) -> Result<Reg> {
        if let Some(r) = self.scalars.get(name) {
            return Ok(*r);
        }
        let reg = self.alloc(1, 0)?;
        self.scalars.insert(name.to_string(), reg);
        self.inputs.push(Input::Scalar {
            name: name.to_string(),
            reg,
        });
        Ok(reg)
    }

    fn tensor(&mut self, name: &str, rank: usize) -> Result<Reg> {
        if let Some((base, r)) = self.tensors.get(name) {
            if *r != rank {
                return Err(Error::new(
                    ErrorKind::Index,
                    format!("the parameter {name} is used with {rank} and with {r} indices"),
                ));
            }
            return Ok(*base);
        }
        let len = u32::try_from(rank)
            .ok()
            .and_then(|r| self.dim.checked_pow(r))
            .unwrap_or(usize::MAX);
        if len > MAX_REGISTERS {
            return Err(numeric(format!(
                "the parameter {name} has too many components to load"
            )));
        }
        let base = self.alloc(len, 0)?;
        let decl = self.ctx.params.get(name);
        self.tensors.insert(name.to_string(), (base, rank));
        self.inputs.push(Input::Tensor {
            name: name.to_string(),
            rank,
            base,
            parallel: decl.is_some_and(|d| d.parallel),
            antisymmetric: decl.is_some_and(|d| d.antisymmetric),
        });
        Ok(base)
    }

    // ───────────── indices ─────────────

    /// How many values an index takes: d, or d - 1 for a parallel index.
    fn range(&self, name: &str) -> usize {
        match self.ctx.index_kind(name) {
            IndexKind::Bulk => self.dim,
            IndexKind::Parallel => self.dim - 1,
        }
    }

    fn resolve(&self, i: &Index, env: &Env) -> Result<usize> {
        match i {
            Index::N => Ok(self.dim - 1),
            Index::Named(s) => env
                .iter()
                .rev()
                .find(|(n, _)| n == s)
                .map(|(_, v)| *v)
                .ok_or_else(|| Error::new(ErrorKind::Index, format!("the index {s} has no value"))),
        }
    }

    /// Free indices of a subterm (cached by address).
    fn free(&mut self, t: &Term) -> Result<Rc<[String]>> {
        // Leaves, not remembered.
        match t {
            Term::Num(_) | Term::Sym(_) | Term::Dist(..) | Term::DeltaFn(..) | Term::DeltaY(_) => {
                return Ok(self.none.clone())
            }
            Term::Comp(_, i) | Term::Normal(i) | Term::OutNormal(i) => {
                return Ok(match i {
                    Index::N => self.none.clone(),
                    Index::Named(n) => Rc::from([n.clone()]),
                })
            }
            Term::Kron(Index::N, Index::N) => return Ok(self.none.clone()),
            Term::Kron(i, j) => return once(names(&[i.clone(), j.clone()])),
            Term::Param(_, idx) => return once(names(idx)),
            // |p - q|^c: no index.
            Term::Pow(a, b) if matches!(**a, Term::Dist(..)) && matches!(**b, Term::Num(_)) => {
                return Ok(self.none.clone())
            }
            _ => {}
        }
        let key = t as *const Term as usize;
        if let Some(f) = self.frees.get(&key) {
            return Ok(f.clone());
        }
        let f: Rc<[String]> = match t {
            Term::Num(_)
            | Term::Sym(_)
            | Term::Dist(..)
            | Term::DeltaFn(..)
            | Term::DeltaY(_)
            | Term::Comp(..)
            | Term::Normal(_)
            | Term::OutNormal(_)
            | Term::Kron(..)
            | Term::Param(..) => self.none.clone(),
            Term::Pow(a, b) => once([&self.free(a)?[..], &self.free(b)?[..]].concat())?,
            Term::Mul(ts) | Term::Fun(_, _, ts) => {
                let mut all = Vec::new();
                for t in ts {
                    all.extend(self.free(t)?.iter().cloned());
                }
                once(all)?
            }
            Term::Add(ts) => {
                let mut first: Option<Rc<[String]>> = None;
                for s in ts {
                    let f = self.free(s)?;
                    match &first {
                        None => first = Some(f),
                        Some(g) if *g != f => {
                            return Err(Error::new(
                                ErrorKind::Index,
                                format!(
                                "the terms of a sum have different free indices: {{{}}} and {{{}}}",
                                g.join(", "),
                                f.join(", ")
                            ),
                            ))
                        }
                        Some(_) => {}
                    }
                }
                first.unwrap_or_else(|| Rc::from([]))
            }
            Term::Der(i, _, body) => {
                once([names(std::slice::from_ref(i)), self.free(body)?.to_vec()].concat())?
            }
            Term::Corr(ops) => once(ops.iter().flat_map(|o| names(&o.indices)).collect())?,
            Term::Integral(i) => self.free(&i.body)?,
        };
        self.frees.insert(key, f.clone());
        Ok(f)
    }

    /// Every assignment of values to indices with these ranges, in order.
    fn assignments(&mut self, ranges: &[usize]) -> Result<Vec<Vec<usize>>> {
        let total = ranges
            .iter()
            .try_fold(1usize, |acc, r| acc.checked_mul(*r))
            .unwrap_or(usize::MAX);
        self.unrolled = self.unrolled.saturating_add(total);
        if self.unrolled > MAX_UNROLLED {
            return Err(numeric(format!(
                "unrolling the summed indices would write more than {MAX_UNROLLED} products"
            )));
        }
        let mut out = Vec::with_capacity(total);
        let mut idx = vec![0; ranges.len()];
        if total == 0 {
            return Ok(out);
        }
        'all: loop {
            out.push(idx.clone());
            for k in (0..idx.len()).rev() {
                idx[k] += 1;
                if idx[k] < ranges[k] {
                    continue 'all;
                }
                idx[k] = 0;
            }
            break;
        }
        Ok(out)
    }

    /// Σ over `names` of `f`, with each assignment bound in `env`.
    fn unroll(
        &mut self,
        names: &[String],
        env: &mut Env,
        mut f: impl FnMut(&mut Self, &mut Env) -> Result<Val>,
    ) -> Result<Val> {
        let ranges: Vec<usize> = names.iter().map(|n| self.range(n)).collect();
        let mut terms = Vec::new();
        for values in self.assignments(&ranges)? {
            let depth = env.len();
            env.extend(names.iter().cloned().zip(values));
            let v = f(self, env);
            env.truncate(depth);
            terms.push(v?);
        }
        self.sum(terms, vec![])
    }

    // ───────────── terms ─────────────

    fn term(&mut self, t: &Term, env: &mut Env) -> Result<Val> {
        match t {
            Term::Num(c) => Ok(Val::Const(to_f64(c)?)),
            Term::Sym(s) if s == DIMENSION => Ok(Val::Const(self.dim as f64)),
            Term::Sym(s) => Ok(Val::Reg(self.scalar(s)?)),
            Term::Add(ts) => {
                let (mut pos, mut neg) = (Vec::new(), Vec::new());
                for s in ts {
                    let (negative, v) = self.signed(s, env)?;
                    if negative { &mut neg } else { &mut pos }.push(v);
                }
                self.sum(pos, neg)
            }
            Term::Mul(ts) => self.mul_term(ts, env, false),
            Term::Pow(a, b) => {
                let shared = twice(self.free(a)?.iter().chain(self.free(b)?.iter()))?;
                if shared.is_empty() {
                    self.power(t, a, b, env)
                } else {
                    self.unroll(&shared, env, |s, env| s.power(t, a, b, env))
                }
            }
            Term::Dist(p, q) => {
                let saved = self.enter(t);
                let r2 = self.dist2(p, q)?;
                let v = self.pow_exact(r2, &BigRational::new(1.into(), 2.into()));
                self.origin = saved;
                v
            }
            Term::Comp(p, i) => {
                let k = self.resolve(i, env)?;
                if k == self.dim - 1 && self.ctx.is_boundary_point(p) {
                    // On the wall the normal coordinate is 0.
                    return Ok(Val::Const(0.0));
                }
                Ok(Val::Reg(self.point(p)? + k as Reg))
            }
            Term::Param(name, idx) => {
                let repeated = twice(names(idx).iter())?;
                if repeated.is_empty() {
                    self.component(name, idx, env)
                } else {
                    self.unroll(&repeated, env, |s, env| s.component(name, idx, env))
                }
            }
            Term::Kron(Index::Named(i), Index::Named(j)) if i == j => {
                Ok(Val::Const(self.range(i) as f64))
            }
            Term::Kron(i, j) => {
                let same = self.resolve(i, env)? == self.resolve(j, env)?;
                Ok(Val::Const(if same { 1.0 } else { 0.0 }))
            }
            Term::Normal(i) => {
                let normal = self.resolve(i, env)? == self.dim - 1;
                Ok(Val::Const(if normal { 1.0 } else { 0.0 }))
            }
            Term::Fun(..) if t.as_hyp2f1().is_some() => {
                let Some(([a, b, c, z], k)) = t.as_hyp2f1() else {
                    return Err(self.unevaluated(t));
                };
                let saved = self.enter(t);
                let mut regs = [0; 4];
                for (slot, arg) in regs.iter_mut().zip([a, b, c, z]) {
                    let v = self.term(arg, env)?;
                    *slot = self.reg(v)?;
                }
                let [a, b, c, z] = regs;
                let v = self.emit(Op::Hyp { a, b, c, z, k });
                self.origin = saved;
                Ok(Val::Reg(v?))
            }
            Term::Corr(_)
            | Term::DeltaFn(..)
            | Term::DeltaY(_)
            | Term::Der(..)
            | Term::Integral(_)
            | Term::Fun(..)
            | Term::OutNormal(_) => Err(self.unevaluated(t)),
        }
    }

    /// A term of a sum, as a sign and a magnitude: a product with a
    /// negative coefficient is subtracted instead of multiplied by it.
    fn signed(&mut self, t: &Term, env: &mut Env) -> Result<(bool, Val)> {
        let negative = |f: &Term| matches!(f, Term::Num(c) if c.is_negative());
        match t {
            Term::Num(c) if c.is_negative() => Ok((true, Val::Const(to_f64(&-c)?))),
            Term::Mul(ts) if ts.iter().any(negative) => Ok((true, self.mul_term(ts, env, true)?)),
            _ => Ok((false, self.term(t, env)?)),
        }
    }

    /// A product: indices contracted between factors are summed over, each
    /// group of factors linked by summed indices separately.
    fn mul_term(&mut self, ts: &[Term], env: &mut Env, negate: bool) -> Result<Val> {
        let frees = ts
            .iter()
            .map(|t| self.free(t))
            .collect::<Result<Vec<_>>>()?;
        let contracted = twice(frees.iter().flat_map(|f| f.iter()))?;
        let mut vals = Vec::with_capacity(ts.len());
        if contracted.is_empty() {
            for t in ts {
                vals.push(self.term(t, env)?);
            }
            return self.product(vals, negate);
        }
        // Union-find over the factors: two factors sharing a summed index
        // belong to one sum.
        let mut group: Vec<usize> = (0..ts.len()).collect();
        fn root(group: &mut [usize], mut i: usize) -> usize {
            while group[i] != i {
                group[i] = group[group[i]];
                i = group[i];
            }
            i
        }
        let holders = |name: &String| -> Vec<usize> {
            (0..ts.len()).filter(|&c| frees[c].contains(name)).collect()
        };
        for name in &contracted {
            if let [a, b] = holders(name)[..] {
                let (ra, rb) = (root(&mut group, a), root(&mut group, b));
                group[ra] = rb;
            }
        }
        let mut sums: BTreeMap<usize, (Vec<&Term>, Vec<String>)> = BTreeMap::new();
        for (c, t) in ts.iter().enumerate() {
            if frees[c].iter().any(|s| contracted.contains(s)) {
                let r = root(&mut group, c);
                sums.entry(r).or_default().0.push(t);
            } else {
                vals.push(self.term(t, env)?);
            }
        }
        for name in &contracted {
            if let Some(&c) = holders(name).first() {
                let r = root(&mut group, c);
                if let Some(entry) = sums.get_mut(&r) {
                    entry.1.push(name.clone());
                }
            }
        }
        for (factors, names) in sums.into_values() {
            let v = self.unroll(&names, env, |s, env| {
                let mut vals = Vec::with_capacity(factors.len());
                for f in &factors {
                    vals.push(s.term(f, env)?);
                }
                s.product(vals, false)
            })?;
            vals.push(v);
        }
        self.product(vals, negate)
    }

    /// a^b with no index shared between base and exponent.
    fn power(&mut self, t: &Term, a: &Term, b: &Term, env: &mut Env) -> Result<Val> {
        let saved = self.enter(t);
        let v = self.power_in(a, b, env);
        self.origin = saved;
        v
    }

    fn power_in(&mut self, a: &Term, b: &Term, env: &mut Env) -> Result<Val> {
        let half = BigRational::new(1.into(), 2.into());
        match (a, b) {
            // |p - q|^e = (|p - q|²)^(e/2).
            (Term::Dist(p, q), Term::Num(e)) => {
                let r2 = self.dist2(p, q)?;
                self.pow_exact(r2, &(e * half))
            }
            (Term::Dist(p, q), _) => {
                let r2 = self.dist2(p, q)?;
                let e = self.term(b, env)?;
                let e = self.mul(e, Val::Const(0.5))?;
                self.pow_val(r2, e)
            }
            (_, Term::Num(e)) => {
                let base = self.term(a, env)?;
                self.pow_exact(base, e)
            }
            _ => {
                let base = self.term(a, env)?;
                let e = self.term(b, env)?;
                self.pow_val(base, e)
            }
        }
    }

    /// |p - q|².
    fn dist2(&mut self, p: &Point, q: &Point) -> Result<Val> {
        let p_wall = self.ctx.is_boundary_point(p);
        let q_wall = self.ctx.is_boundary_point(q);
        if p.name == q.name && p_wall == q_wall {
            return Ok(Val::Const(0.0));
        }
        let a = (self.point(p)?, p_wall);
        let b = (self.point(q)?, q_wall);
        let ((p, p_wall), (q, q_wall)) = if a <= b { (a, b) } else { (b, a) };
        Ok(Val::Reg(self.emit(Op::Dist2 {
            p,
            q,
            p_wall,
            q_wall,
        })?))
    }

    /// One component of a parameter tensor.
    fn component(&mut self, name: &str, idx: &[Index], env: &mut Env) -> Result<Val> {
        let ks = idx
            .iter()
            .map(|i| self.resolve(i, env))
            .collect::<Result<Vec<_>>>()?;
        if let Some(decl) = self.ctx.params.get(name) {
            if decl.rank != idx.len() {
                return Err(Error::new(
                    ErrorKind::Index,
                    format!(
                        "the parameter {name} has {} indices, not {}",
                        decl.rank,
                        idx.len()
                    ),
                ));
            }
            // What the declaration promises is zero is zero.
            if (decl.parallel && ks.contains(&(self.dim - 1)))
                || (decl.antisymmetric && ks.len() == 2 && ks[0] == ks[1])
            {
                return Ok(Val::Const(0.0));
            }
        }
        let base = self.tensor(name, idx.len())?;
        let flat = ks.iter().fold(0, |acc, k| acc * self.dim + k);
        Ok(Val::Reg(base + flat as Reg))
    }

    /// Makes `t` the subterm named in errors; returns the previous one.
    fn enter(&mut self, t: &Term) -> u32 {
        let saved = self.origin;
        let key = t as *const Term as usize;
        self.origin = match self.origin_of.get(&key) {
            Some(o) => *o,
            None => {
                let o = match self.origin_by_value.get(t) {
                    Some(o) => *o,
                    None => {
                        let o = self.origins.len() as u32;
                        self.origins.push(self.quote(t));
                        self.origin_by_value.insert(t.clone(), o);
                        o
                    }
                };
                self.origin_of.insert(key, o);
                o
            }
        };
        saved
    }

    fn quote(&self, t: &Term) -> String {
        let s = Printer::new(self.ctx, Style::Unicode).term(t);
        if s.chars().count() > MAX_QUOTE {
            let cut: String = s.chars().take(MAX_QUOTE).collect();
            format!("{cut}…")
        } else {
            s
        }
    }

    fn unevaluated(&self, t: &Term) -> Error {
        let (what, hint) = match t {
            Term::Corr(_) => (
                "a correlator",
                "replace correlators by explicit functions (a model) first",
            ),
            Term::DeltaFn(..) | Term::DeltaY(_) => (
                "a δ-function",
                "a δ-function has no value at a point; integrate it first",
            ),
            Term::Der(..) => (
                "a derivative",
                "differentiate first: simplify the term to its normal form",
            ),
            Term::Integral(_) => (
                "an integral",
                "integrals are evaluated by quadrature, not compiled",
            ),
            Term::Fun(..) => (
                "an unknown function",
                "give the function an explicit form first",
            ),
            _ => (
                "the outward normal N",
                "N has a value only on the surface of a surface integral",
            ),
        };
        numeric(format!(
            "cannot evaluate {what} numerically: {} is left unevaluated",
            self.quote(t)
        ))
        .with_note(hint)
    }

    // ───────────── the program ─────────────

    /// Drops dead code and splits the code per point.
    fn finish(mut self, out: Val) -> Result<Program> {
        let output = self.reg(out)?;
        let dim = self.dim;
        let mut live = vec![false; self.template.len()];
        live[output as usize] = true;
        for ins in self.code.iter().rev() {
            if live[ins.out as usize] {
                let blocks = ins.op.blocks();
                ins.op.operands(|r| {
                    let r = r as usize;
                    let n = if blocks { dim } else { 1 };
                    live[r..r + n].iter_mut().for_each(|l| *l = true);
                });
            }
        }
        self.code.retain(|ins| live[ins.out as usize]);
        let any_live = |base: Reg, len: usize| {
            let base = base as usize;
            live[base..base + len].iter().any(|l| *l)
        };
        self.inputs.retain(|input| match input {
            Input::Scalar { reg, .. } => live[*reg as usize],
            Input::Point { base, .. } => any_live(*base, dim),
            Input::Tensor { base, rank, .. } => any_live(*base, dim.pow(*rank as u32)),
        });
        let mut moving = BTreeMap::new();
        for input in &self.inputs {
            let Input::Point { name, base } = input else {
                continue;
            };
            let mut variant = vec![false; self.template.len()];
            let start = *base as usize;
            variant[start..start + dim]
                .iter_mut()
                .for_each(|v| *v = true);
            let (mut inv, mut var) = (Vec::new(), Vec::new());
            for ins in &self.code {
                let mut moves = false;
                ins.op.operands(|r| moves |= variant[r as usize]);
                if moves {
                    variant[ins.out as usize] = true;
                    var.push(*ins);
                } else {
                    inv.push(*ins);
                }
            }
            moving.insert(
                name.clone(),
                Moving {
                    base: *base,
                    invariant: inv,
                    variant: var,
                },
            );
        }
        Ok(Program {
            dim,
            template: self.template,
            inputs: self.inputs,
            code: self.code,
            output,
            origins: self.origins,
            declared: self.ctx.points.iter().map(|p| p.name.clone()).collect(),
            moving,
        })
    }
}
