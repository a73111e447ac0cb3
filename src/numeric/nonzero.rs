//! Whether an expression in parameters alone is not identically zero,
//! shown by one value that is certainly not zero.
//!
//! A remainder that normalisation leaves as a rational function (times
//! symbolic powers) of the parameters may still vanish identically when
//! the normal form missed a cancellation. A claim whose remainder holds
//! ₂F₁ is refuted only when some such coefficient is shown to be a nonzero
//! function; this is how: at seeded random values of the parameters (all
//! between 1/2 and 5/2, a symbolic dimension between 5/2 and 13/2 — or,
//! when points enter, a whole one from 3 to 6 — and S_d its value there)
//! and of the points (bulk points between 1/4 and 5/4 above a wall,
//! boundary points on it, coordinates along it between -1 and 1) the
//! compiled value
//! is judged by the agreement rule's notion of a known value
//! (docs/conventions.md §8): a value much larger than its rounding bound
//! and not lost to cancellation among its terms is not zero, so the
//! function is not zero either. Nothing here proves anything: a function
//! that is zero at every sample stays undecided.

use std::collections::BTreeMap;

use num_rational::BigRational;

use super::eval::compile;
use super::models::{sphere_area, SPHERE_AREA};
use super::Values;
use crate::context::{Context, DIMENSION};
use crate::term::Term;

/// Samples tried.
const SAMPLES: usize = 4;

/// A value at least this many times its rounding bound, and this fraction
/// of its terms' size, is certainly not zero.
const MARGIN: f64 = 1e3;
const CANCELLED: f64 = 1e-8;

/// `Some(true)` when some sample shows `t` is not zero; `Some(false)` when
/// every sample is zero or too small to tell; `None` when `t` is not an
/// explicit function of parameters and points (correlators, δ-functions,
/// derivatives, unknown functions, vector parameters), which this cannot
/// evaluate.
pub fn somewhere_nonzero(ctx: &Context, t: &Term, seed: u64) -> Option<bool> {
    let mut symbols = Vec::new();
    let with_points = !parameters_only(t, &mut symbols);
    if with_points {
        symbols.clear();
        if !explicit(t, &mut symbols) {
            return None;
        }
    }
    symbols.sort();
    symbols.dedup();
    let mut state = seed;
    let mut next = move || super::splitmix(&mut state);
    let declared = match &ctx.dimension {
        Some(Term::Num(n)) => num_traits::ToPrimitive::to_f64(n),
        _ => None,
    };
    for _ in 0..SAMPLES {
        // A dimension that is not whole, so that nothing special to whole
        // d hides a difference (the program is compiled for d = 3 and
        // never reads it: d is a number in the term).
        let d = declared.unwrap_or_else(|| {
            if with_points {
                // Points need whole coordinates' count.
                3.0 + (4.0 * next()).floor()
            } else {
                2.5 + 4.0 * next()
            }
        });
        let d_exact = BigRational::from_float(d)?;
        let term = crate::term::diff::substitute(t, DIMENSION, &Term::Num(d_exact));
        let dim = if with_points {
            d as usize
        } else {
            declared.map_or(3, |d| d as usize)
        };
        let mut scalars = BTreeMap::new();
        for s in &symbols {
            let v = if s == SPHERE_AREA {
                sphere_area_at(d)
            } else {
                0.5 + 2.0 * next()
            };
            scalars.insert(s.clone(), v);
        }
        let mut points = BTreeMap::new();
        if with_points {
            for decl in &ctx.points {
                let mut p: Vec<f64> = (0..dim).map(|_| 2.0 * next() - 1.0).collect();
                if ctx.has_halfspace() {
                    p[dim - 1] = if decl.boundary { 0.0 } else { 0.25 + next() };
                }
                points.insert(decl.name.clone(), p);
            }
        }
        let values = Values {
            dim,
            scalars,
            tensors: BTreeMap::new(),
            points,
        };
        let Ok(program) = compile(ctx, &term, &[], dim) else {
            return Some(false);
        };
        let Ok(v) = program.eval_bounded(&values) else {
            continue;
        };
        if v.overflow || v.underflow {
            continue;
        }
        if v.value.abs() > MARGIN * v.rounding && v.value.abs() > CANCELLED * v.scale {
            return Some(true);
        }
    }
    Some(false)
}

/// S_d = 2 π^(d/2)/Γ(d/2) at a dimension that need not be whole.
fn sphere_area_at(d: f64) -> f64 {
    if d.fract() == 0.0 && d >= 1.0 {
        return sphere_area(d as usize);
    }
    let g = super::special::gamma(d / 2.0).unwrap_or(f64::NAN);
    2.0 * std::f64::consts::PI.powf(d / 2.0) / g
}

/// True if `t` is an explicit function of parameters and points
/// (distances, coordinates, normals, Kronecker deltas): what a program
/// evaluates without vectors to choose; collects the parameters' names.
fn explicit(t: &Term, out: &mut Vec<String>) -> bool {
    match t {
        Term::Num(_) | Term::Dist(..) | Term::Comp(..) | Term::Normal(_) | Term::Kron(..) => true,
        Term::Sym(s) => {
            if s != DIMENSION {
                out.push(s.clone());
            }
            true
        }
        Term::Pow(a, b) => explicit(a, out) && explicit(b, out),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().all(|s| explicit(s, out)),
        _ => false,
    }
}

/// True if `t` is built from numbers and parameters with sums, products
/// and powers only; collects the parameters' names.
fn parameters_only(t: &Term, out: &mut Vec<String>) -> bool {
    match t {
        Term::Num(_) => true,
        Term::Sym(s) => {
            if s != DIMENSION {
                out.push(s.clone());
            }
            true
        }
        Term::Pow(a, b) => parameters_only(a, out) && parameters_only(b, out),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().all(|s| parameters_only(s, out)),
        _ => false,
    }
}

/// Samples tried by [`hypergeometric_nonzero`].
const HYPERGEOMETRIC_SAMPLES: usize = 8;

/// Whether a remainder holding ₂F₁ that the normal form cannot take apart
/// (several families: different arguments, or parameters that differ by
/// more than whole shifts) is not identically zero, shown by one value
/// that is certainly not zero: the whole remainder, ₂F₁ included, at
/// seeded random parameters between 1/10 and 9/10 (where ₂F₁ of a
/// parameter is on its disc of convergence and real), a symbolic dimension
/// between 5/2 and 13/2, judged as [`somewhere_nonzero`] judges. The
/// remainder is an analytic function of its parameters there, so one
/// certain nonzero value refutes the identity. Points are not sampled: a
/// remainder that holds them stays undecided. False when no sample shows
/// a nonzero value (undecided, never proved).
pub fn hypergeometric_nonzero(ctx: &Context, t: &Term, seed: u64) -> bool {
    let mut symbols = Vec::new();
    if !with_hypergeometric(t, &mut symbols) {
        return false;
    }
    symbols.sort();
    symbols.dedup();
    let mut state = seed;
    let mut next = move || super::splitmix(&mut state);
    let declared = match &ctx.dimension {
        Some(Term::Num(n)) => num_traits::ToPrimitive::to_f64(n),
        _ => None,
    };
    for _ in 0..HYPERGEOMETRIC_SAMPLES {
        let d = declared.unwrap_or_else(|| 2.5 + 4.0 * next());
        let Some(d_exact) = BigRational::from_float(d) else {
            return false;
        };
        let term = crate::term::diff::substitute(t, DIMENSION, &Term::Num(d_exact));
        let mut scalars = BTreeMap::new();
        for s in &symbols {
            let v = if s == SPHERE_AREA {
                sphere_area_at(d)
            } else {
                0.1 + 0.8 * next()
            };
            scalars.insert(s.clone(), v);
        }
        let dim = declared.map_or(3, |d| d as usize).clamp(1, 16);
        let values = Values {
            dim,
            scalars,
            tensors: BTreeMap::new(),
            points: BTreeMap::new(),
        };
        let Ok(program) = compile(ctx, &term, &[], dim) else {
            return false;
        };
        let Ok(v) = program.eval_bounded(&values) else {
            continue;
        };
        if v.overflow || v.underflow || !v.value.is_finite() {
            continue;
        }
        if v.value.abs() > MARGIN * v.rounding && v.value.abs() > CANCELLED * v.scale {
            return true;
        }
    }
    false
}

/// True if `t` is built from numbers, parameters and ₂F₁ of them with sums,
/// products and powers; collects the parameters' names.
fn with_hypergeometric(t: &Term, out: &mut Vec<String>) -> bool {
    match t {
        Term::Num(_) => true,
        Term::Sym(s) => {
            if s != DIMENSION {
                out.push(s.clone());
            }
            true
        }
        Term::Fun(name, _, args) if name == crate::term::HYP2F1 => {
            args.iter().all(|a| with_hypergeometric(a, out))
        }
        Term::Pow(a, b) => with_hypergeometric(a, out) && with_hypergeometric(b, out),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().all(|s| with_hypergeometric(s, out)),
        _ => false,
    }
}
