//! Compiling explicit terms to flat programs and evaluating them.
//!
//! [`compile`] takes a term in normal form that is explicit — numbers,
//! parameters, powers, sums, products, distances, coordinates, parameter
//! components, Kronecker deltas and the normal — together with the
//! dimension and the values of its free indices, and writes straight-line
//! code over a register file ([`Program`]): summed indices are unrolled,
//! names become register numbers, constants fold, and equal
//! subexpressions (each distance, each power of an atom) are computed
//! once. [`Program::eval`] reads the parameters and coordinates from
//! [`Values`](super::Values) and runs the code; [`Program::eval_many`]
//! moves one point through many positions — the inner loop of quadrature
//! — running once the part of the code that does not depend on that point;
//! [`Program::batch`] moves a point and the normal together over blocks of
//! nodes, one instruction at a time across the block (`eval/batch.rs`).
//! Whatever has no real value (division by zero, a non-integer power of a
//! negative number, an overflow) is an [`Error`](crate::diagnostic::Error) of kind
//! [`ErrorKind::Numeric`](crate::diagnostic::ErrorKind::Numeric), never a
//! silent NaN; so is a term with anything left unevaluated (a correlator,
//! a derivative, a δ-function, an integral, an unknown function).
//!
//! `eval/compile.rs` is the compiler, `eval/program.rs` the code and its
//! interpreter, `eval/double.rs` the double-double re-run for values that
//! cancel in f64.

mod batch;
mod compile;
mod double;
mod program;

pub use batch::{Batch, LANES};
pub use program::{Bounded, Program};

use crate::context::Context;
use crate::diagnostic::Result;
use crate::term::Term;

/// Compiles the explicit term `term` for dimension `dim`, with its free
/// indices set by `free` (a value per index name; names the term does not
/// have free are ignored). Summed indices run over 0..dim, parallel ones
/// over 0..dim - 1; the normal direction is the last axis.
pub fn compile(
    ctx: &Context,
    term: &Term,
    free: &[(String, usize)],
    dim: usize,
) -> Result<Program> {
    compile::compile(ctx, term, free, dim)
}

#[cfg(test)]
mod tests;
