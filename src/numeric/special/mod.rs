//! Special functions of real arguments for conformal blocks: Γ and its
//! relatives ([`gamma`](mod@gamma)), the Gauss hypergeometric function ₂F₁
//! ([`hypergeometric`]), and the blocks of a bulk two-point function near a
//! flat wall built from it ([`blocks`]).
//!
//! Every function that can be undefined returns `Result<f64, SpecialError>`:
//! a small `Copy` value, so that a compiled program can call these in its
//! inner loop and word the error only when one occurs (as
//! [`crate::numeric::eval`] does for its own operations). The error turns
//! into a [`crate::diagnostic::Error`] of kind `Numeric` with `?`.
//!
//! Accuracy: about 1e-15 for Γ and ψ; for ₂F₁ 1e-13 relative or better on
//! the whole real axis for parameters up to about 20, with the exceptions
//! and the larger parameters described in [`hypergeometric`]. Each module
//! says how it gets there, and `tests/special.rs` checks it against
//! published values, an arbitrary-precision library and the defining series
//! summed exactly.

pub mod blocks;
pub mod gamma;
pub mod hypergeometric;

use std::fmt;

use crate::diagnostic::{Error, ErrorKind};

pub use blocks::{
    boundary_block, boundary_three_point_block, bulk_block, collinear_block, collinear_block_mixed,
    four_point_block, four_point_block_mixed, four_point_block_polar, four_point_block_polar_mixed,
    z_zbar, Externals,
};
pub use gamma::{digamma, gamma, ln_gamma, rgamma};
pub use hypergeometric::{hyp2f1, hyp2f1_regularized, hyp2f1_scale, hyp2f1_vanishing_bc};

/// Why a special function has no real value at its arguments.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SpecialError {
    /// An argument is NaN or infinite.
    NotFinite,
    /// Γ(x) at a non-positive integer x.
    GammaPole,
    /// ₂F₁(a, b; c; z) with c a non-positive integer -m, and neither a nor
    /// b a non-positive integer -n with n ≤ m (which would end the series
    /// before the zero denominator).
    ParameterPole,
    /// ₂F₁ at z > 1, on its branch cut, where it is not real (unless it is
    /// a polynomial).
    BranchCut,
    /// ₂F₁ at z = 1 with c - a - b ≤ 0 (DLMF 15.4.21–15.4.23).
    Divergent,
    /// A block at a cross-ratio ξ that is not positive.
    CrossRatio,
    /// A four-point block at z or z̄ outside (0, 1), or at z = z̄ in d = 4.
    FourPointRatio,
    /// A bulk–boundary–boundary block at a cross-ratio χ outside (0, 1).
    ThreePointRatio,
    /// A four-point block asked for in a dimension other than 2 and 4.
    FourPointDimension,
    /// The value, or a factor it is built from, is beyond the range of
    /// floating point.
    Overflow,
    /// The parameters are too large for the series to converge within
    /// the term budget.
    TooLarge,
    /// The value is so much smaller than the terms it is summed from that
    /// more than five digits would be lost (₂F₁ oscillates for large a, b
    /// beside a small c, and vanishes near its zeros).
    Cancellation,
}

impl SpecialError {
    /// A sentence for a person; the caller adds the arguments.
    pub fn reason(self) -> &'static str {
        match self {
            SpecialError::NotFinite => "an argument is not a finite number",
            SpecialError::GammaPole => "Γ has a pole at each non-positive integer",
            SpecialError::ParameterPole => {
                "c is a non-positive integer -m and neither a nor b is a non-positive integer -n with n ≤ m: ₂F₁ has a pole there"
            }
            SpecialError::BranchCut => {
                "z > 1 lies on the branch cut of ₂F₁, where it has no real value (only polynomial cases are real there)"
            }
            SpecialError::Divergent => "₂F₁ diverges at z = 1 when c - a - b ≤ 0",
            SpecialError::CrossRatio => "the cross-ratio ξ must be positive",
            SpecialError::FourPointRatio => {
                "a four-point block is evaluated at real z, z̄ in (0, 1), and in d = 4 at z ≠ z̄"
            }
            SpecialError::ThreePointRatio => {
                "the cross-ratio χ of a bulk–boundary–boundary function lies in (0, 1) (χ = 1 only on the geodesic, where a block may diverge)"
            }
            SpecialError::FourPointDimension => {
                "four-point blocks have closed forms in d = 2 and d = 4 only"
            }
            SpecialError::Overflow => "the value is beyond the range of floating point",
            SpecialError::Cancellation => {
                "the value is much smaller than the terms it is summed from (the function oscillates or is near a zero): more than five digits would be lost"
            }
            SpecialError::TooLarge => {
                "the parameters are too large: the series did not converge within its term budget"
            }
        }
    }
}

impl fmt::Display for SpecialError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.reason())
    }
}

impl std::error::Error for SpecialError {}

impl From<SpecialError> for Error {
    fn from(e: SpecialError) -> Error {
        Error::new(ErrorKind::Numeric, e.reason())
    }
}

/// `Ok(v)` if `v` is finite, `Err(Overflow)` otherwise: the last check of
/// every public function, so that no NaN or infinity leaves this module.
fn finite(v: f64) -> Result<f64, SpecialError> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(SpecialError::Overflow)
    }
}
