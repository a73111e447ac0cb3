//! Numeric evaluation: explicit terms to numbers, model correlators as
//! explicit terms, and quadrature.
//!
//! The path is symbolic first: a model replaces each correlator by an
//! explicit function of the points ([`models`]); normalisation
//! differentiates it symbolically; [`eval`] compiles the resulting explicit
//! term once into a flat program and runs it at many numeric points;
//! [`quadrature`] integrates such programs over spheres, hemispheres and the
//! boundary plane with an error estimate. Floating point appears only here.

pub mod agreement;
pub mod decompose;
pub mod eval;
pub mod models;
pub mod nonzero;
pub mod perturb;
pub mod quadrature;
pub mod series;
pub mod session;
pub mod special;
pub mod structures;

use std::collections::BTreeMap;

/// The next number of a seeded sequence, uniform in [0, 1): splitmix64
/// (Steele, Lea & Flood 2014), advancing `state`.
pub fn splitmix(state: &mut u64) -> f64 {
    *state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
}

/// Numeric values for the symbols of a file.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Values {
    /// The dimension d (a whole number ≥ 2).
    pub dim: usize,
    /// Scalar parameters (and `d` itself when symbolic).
    pub scalars: BTreeMap<String, f64>,
    /// Parameters with indices, row-major: a[i] at `[i]`, ω[i,j] at `[i * dim + j]`.
    pub tensors: BTreeMap<String, Vec<f64>>,
    /// Coordinates of points, `dim` each; the normal coordinate y is the last.
    pub points: BTreeMap<String, Vec<f64>>,
}
