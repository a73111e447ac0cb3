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
pub mod quadrature;
pub mod session;
pub mod special;

use std::collections::BTreeMap;

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
