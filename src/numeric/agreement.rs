//! The one rule by which the numeric layer decides whether two numbers
//! agree, and the numbers it judges: a value with its quadrature error
//! estimate, a bound on its rounding error and the size of the terms it was
//! summed from.
//!
//! `compare`, `flux` (each insertion's flux against its contact terms),
//! `scan` (every row) and the numeric check of a derivation step all call
//! [`agreement`]; the divergence away from insertions is judged by
//! [`vanishes`] against the size of the current there. Every tolerance is a
//! named constant below. The rule (docs/conventions.md §8):
//!
//! 1. A value that overflowed, underflowed to nothing, or whose rounding
//!    bound is not small against it ([`RESOLUTION`]) is not known: the two
//!    sides neither agree nor disagree — the verdict is unknown, with the
//!    reason. An exact 0 (nothing was rounded) is known. So is a sum of
//!    parts (the summands of the statement as written, the nodes of a
//!    quadrature rule) that cancel one another, when the rounding bound is
//!    small against the sizes of the parts: that is how a Ward identity
//!    `… = 0` is confirmed. Each part's size is its value, not the size of
//!    the terms inside the model's explicit form for it.
//! 2. Otherwise they agree when |l - r| ≤ [`RELATIVE_TOLERANCE`] · max(|l|,
//!    |r|, sizes of their terms) + [`ERROR_SAFETY`] · (the quadrature error
//!    estimates and rounding bounds of both), and disagree otherwise.
//!
//! A single part that is 0 to within its rounding, summed inside the
//! model's explicit form from far larger terms (total cancellation), is
//! therefore unknown, not 0: in double precision it cannot be told from a
//! small number computed from large terms.

use std::fmt;

/// Relative tolerance of agreement, against the larger side and the sizes
/// of the terms summed into the sides.
pub const RELATIVE_TOLERANCE: f64 = 1e-9;
/// How many times the error estimates (quadrature and rounding) of the two
/// sides their difference may reach.
pub const ERROR_SAFETY: f64 = 10.0;
/// A value is known when its rounding bound is at most this fraction of it.
pub const RESOLUTION: f64 = 1e-6;
/// The divergence of a current away from insertions vanishes when it is at
/// most this fraction of |current|/r there (plus its rounding).
pub const CONSERVATION_TOLERANCE: f64 = 1e-8;

/// One numeric value with its error estimate (0 when no quadrature was
/// involved) and the number of integrand evaluations.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Value {
    pub value: f64,
    /// The quadrature error estimate (0 for a value at a point).
    pub error: f64,
    pub nodes: usize,
    /// The size of the parts the value was summed from (Σ|part|), for
    /// judging a value that should vanish.
    pub scale: f64,
    /// A bound on the rounding error of the value (infinite after an
    /// overflow).
    pub rounding: f64,
    /// Some intermediate result fell below the normal range of f64.
    pub underflow: bool,
    /// The size of the terms inside the parts (the model's explicit
    /// forms), for the report: what cancelled when a part is not known.
    pub terms: f64,
}

impl Value {
    /// An exact value (no rounding, no quadrature).
    pub fn exact(value: f64) -> Value {
        Value {
            value,
            error: 0.0,
            nodes: 0,
            scale: value.abs(),
            rounding: 0.0,
            underflow: false,
            terms: value.abs(),
        }
    }

    /// Why the value is not known, if it is not: rule 1 of the module.
    pub fn loss(&self) -> Option<Loss> {
        if !self.value.is_finite() || !self.rounding.is_finite() || !self.scale.is_finite() {
            return Some(Loss::Overflow);
        }
        if self.rounding <= RESOLUTION * self.value.abs() {
            return None;
        }
        // Parts that cancel one another: 0 relative to their sizes.
        if self.rounding <= RESOLUTION * self.scale {
            return None;
        }
        Some(if self.underflow {
            Loss::Underflow
        } else {
            Loss::Cancellation
        })
    }
}

/// In JSON: every field (a number that is not finite as `null`), with
/// `evaluations` for `nodes`, and `loss`, why the value is not known (or
/// `null`).
impl serde::Serialize for Value {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let mut m = s.serialize_struct("Value", 8)?;
        m.serialize_field("value", &self.value)?;
        m.serialize_field("error", &self.error)?;
        m.serialize_field("rounding", &self.rounding)?;
        m.serialize_field("evaluations", &self.nodes)?;
        m.serialize_field("scale", &self.scale)?;
        m.serialize_field("terms", &self.terms)?;
        m.serialize_field("underflow", &self.underflow)?;
        m.serialize_field("loss", &self.loss())?;
        m.end()
    }
}

/// Why a value is not known.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Loss {
    /// An intermediate result was too large for f64.
    Overflow,
    /// The terms are below the normal range of f64 (about 2.2e-308): too
    /// small to carry digits.
    Underflow,
    /// The terms cancel: the value is small against their size and the
    /// rounding bound is not small against the value.
    Cancellation,
}

/// The verdict on two numbers. In JSON `{"verdict": "agree"}`, or
/// `{"verdict": "unknown", "reason": "…"}`.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
#[serde(tag = "verdict", content = "reason", rename_all = "snake_case")]
pub enum Agreement {
    Agree,
    Disagree,
    /// Neither: one side is not known; the reason, worded for the report.
    Unknown(String),
}

impl Agreement {
    pub fn agrees(&self) -> bool {
        matches!(self, Agreement::Agree)
    }

    pub fn is_unknown(&self) -> bool {
        matches!(self, Agreement::Unknown(_))
    }

    /// Two verdicts together (all components, all rows): a disagreement
    /// anywhere is a finding and wins; then an unknown; agreement only when
    /// both agree.
    pub fn and(self, other: Agreement) -> Agreement {
        match (self, other) {
            (Agreement::Disagree, _) | (_, Agreement::Disagree) => Agreement::Disagree,
            (Agreement::Unknown(r), _) | (_, Agreement::Unknown(r)) => Agreement::Unknown(r),
            _ => Agreement::Agree,
        }
    }
}

impl fmt::Display for Loss {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Loss::Overflow => "overflowed",
            Loss::Underflow => "underflowed: its terms are below the range of double precision",
            Loss::Cancellation => "lost to cancellation",
        })
    }
}

/// The sentence for a side that is not known.
pub fn describe_loss(side: &str, v: &Value, loss: Loss) -> String {
    match loss {
        Loss::Overflow => format!("the {side} side overflowed"),
        Loss::Underflow => format!(
            "the {side} side underflowed: it is {:.3e} ± {:.1e}, summed from terms below the normal range of double precision (about 2.2e-308), so it carries no digits",
            v.value, v.rounding
        ),
        Loss::Cancellation => format!(
            "the {side} side is lost to cancellation: terms of size {:.1e} sum to {:.3e} ± {:.1e} (rounding), so it is not known to {:.0e}",
            v.terms.max(v.scale), v.value, v.rounding, RESOLUTION
        ),
    }
}

/// The one agreement rule (module documentation).
pub fn agreement(l: &Value, r: &Value) -> Agreement {
    for (side, v) in [("left", l), ("right", r)] {
        if let Some(loss) = v.loss() {
            return Agreement::Unknown(describe_loss(side, v, loss));
        }
    }
    let difference = (l.value - r.value).abs();
    if difference <= allowed(l, r) {
        Agreement::Agree
    } else {
        Agreement::Disagree
    }
}

/// The largest difference [`agreement`] accepts between known values.
pub fn allowed(l: &Value, r: &Value) -> f64 {
    RELATIVE_TOLERANCE * size(l, r) + ERROR_SAFETY * (l.error + r.error + l.rounding + r.rounding)
}

/// The size agreement is relative to: the larger side and the sizes of the
/// terms summed into either.
pub fn size(l: &Value, r: &Value) -> f64 {
    l.value
        .abs()
        .max(r.value.abs())
        .max(l.scale)
        .max(r.scale)
        .max(f64::MIN_POSITIVE)
}

/// |l - r| relative to [`size`], for the report's column.
pub fn relative_difference(l: &Value, r: &Value) -> f64 {
    (l.value - r.value).abs() / size(l, r)
}

/// Whether a quantity that should vanish does, against an outside scale
/// (the size of a current over the radius): |v| ≤ [`CONSERVATION_TOLERANCE`]
/// · scale + [`ERROR_SAFETY`] · (its error and rounding). Unknown when the
/// quantity's rounding alone is not small against the scale.
pub fn vanishes(v: &Value, scale: f64) -> Agreement {
    if !v.value.is_finite() || !v.rounding.is_finite() || !scale.is_finite() {
        return Agreement::Unknown("the divergence overflowed".into());
    }
    let noise = ERROR_SAFETY * (v.error + v.rounding);
    if noise > CONSERVATION_TOLERANCE * scale || scale == 0.0 {
        return Agreement::Unknown(format!(
            "the divergence {:.3e} ± {:.1e} is not resolved against |current|/r = {:.1e}",
            v.value,
            v.error + v.rounding,
            scale
        ));
    }
    if v.value.abs() <= CONSERVATION_TOLERANCE * scale + noise {
        Agreement::Agree
    } else {
        Agreement::Disagree
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rounded(value: f64, rounding: f64, scale: f64) -> Value {
        Value {
            rounding,
            scale,
            ..Value::exact(value)
        }
    }

    #[test]
    fn known_values_agree_or_disagree() {
        let a = rounded(0.5, 1e-17, 0.5);
        assert_eq!(agreement(&a, &a), Agreement::Agree);
        assert_eq!(
            agreement(&a, &rounded(1.0, 1e-17, 1.0)),
            Agreement::Disagree
        );
        assert_eq!(
            agreement(&Value::exact(0.0), &Value::exact(0.0)),
            Agreement::Agree
        );
    }

    #[test]
    fn underflow_and_cancellation_are_unknown() {
        let zero = Value {
            underflow: true,
            ..rounded(0.0, 5e-324, 0.0)
        };
        assert!(agreement(&zero, &zero).is_unknown());
        // 0.25 from terms of 1e16: the rounding bound is larger than it.
        let lost = Value {
            terms: 1e16,
            ..rounded(0.25, 10.0, 0.25)
        };
        assert!(agreement(&lost, &Value::exact(0.006)).is_unknown());
        assert!(agreement(&lost, &Value::exact(0.0)).is_unknown());
        let overflow = rounded(1.0, f64::INFINITY, 1.0);
        assert!(agreement(&overflow, &overflow).is_unknown());
    }

    #[test]
    fn known_parts_that_cancel_are_zero() {
        // Three summands of size about 4 that cancel to 3e-14.
        let sum = rounded(3e-14, 3e-14, 12.0);
        assert_eq!(agreement(&sum, &Value::exact(0.0)), Agreement::Agree);
        // One part whose terms inside cancel: judged against its value.
        let part = Value {
            terms: 12.0,
            ..rounded(3e-14, 3e-14, 3e-14)
        };
        assert!(agreement(&part, &Value::exact(0.0)).is_unknown());
    }

    #[test]
    fn a_disagreement_outweighs_an_unknown() {
        let unknown = Agreement::Unknown("x".into());
        assert_eq!(
            unknown.clone().and(Agreement::Disagree),
            Agreement::Disagree
        );
        assert_eq!(Agreement::Agree.and(unknown.clone()), unknown);
    }
}
