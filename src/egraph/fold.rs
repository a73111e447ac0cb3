//! Exact constant folding as an e-graph analysis.
//!
//! Every e-class knows its value when it is a constant. Folding uses checked
//! operations: a division by zero simply does not fold. Two different
//! constants merged into one class mean that some rule is unsound; instead of
//! panicking, the analysis records the conflict and the run reports it.

use egg::{Analysis, DidMerge, Id};
use num_rational::BigRational;
use num_traits::{ToPrimitive, Zero};

use super::{EGraph, Ward};

/// The constant-folding analysis.
#[derive(Debug, Default, Clone)]
pub struct Fold {
    /// Pairs of different constants found equal: evidence of an unsound rule.
    pub conflicts: Vec<(BigRational, BigRational)>,
}

impl Analysis<Ward> for Fold {
    type Data = Option<BigRational>;

    fn make(egraph: &mut EGraph, enode: &Ward, _id: Id) -> Self::Data {
        let value = |id: &Id| egraph[*id].data.clone();
        match enode {
            Ward::Num(c) => Some(c.clone()),
            Ward::Add(ids) => ids
                .iter()
                .try_fold(BigRational::zero(), |acc, id| Some(acc + value(id)?)),
            Ward::Mul(ids) => {
                let mut acc = BigRational::from_integer(1.into());
                for id in ids.iter() {
                    let v = value(id)?;
                    if v.is_zero() {
                        return Some(BigRational::zero());
                    }
                    acc *= v;
                    // Not folded past the size budget.
                    if crate::budget::bits(&acc) > crate::budget::MAX_BITS {
                        return None;
                    }
                }
                Some(acc)
            }
            Ward::Pow([b, e]) => {
                let b = value(b)?;
                let e = value(e)?;
                if !e.is_integer() {
                    return None;
                }
                let n = e.to_i32()?;
                if n.unsigned_abs() > 4096
                    || (b.is_zero() && n < 0)
                    || !crate::budget::power_fits(&b, u64::from(n.unsigned_abs()))
                {
                    return None;
                }
                let p = num_traits::pow(b, n.unsigned_abs() as usize);
                Some(if n < 0 { p.recip() } else { p })
            }
            _ => None,
        }
    }

    fn merge(&mut self, a: &mut Self::Data, b: Self::Data) -> DidMerge {
        match (a.as_ref(), b) {
            (Some(x), Some(y)) => {
                if *x != y {
                    self.conflicts.push((x.clone(), y));
                }
                DidMerge(false, true)
            }
            (Some(_), None) => DidMerge(false, true),
            (None, Some(y)) => {
                *a = Some(y);
                DidMerge(true, false)
            }
            (None, None) => DidMerge(false, false),
        }
    }

    fn modify(egraph: &mut EGraph, id: Id) {
        if let Some(c) = egraph[id].data.clone() {
            let added = egraph.add(Ward::Num(c));
            egraph.union_trusted(id, added, "fold-constant");
        }
    }
}
