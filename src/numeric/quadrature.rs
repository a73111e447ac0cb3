//! Quadrature rules with error estimates.
