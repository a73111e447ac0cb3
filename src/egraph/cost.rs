//! The extraction cost: first the number of unapplied Ward redexes, then size.
//!
//! A redex is an e-node that some rule's left side matched. The plain size
//! cost would keep the compact left side of a Ward identity; counting
//! redexes first makes extraction prefer the applied form.

use std::collections::HashSet;

use egg::{CostFunction, Id, Language};

use super::Ward;

/// Cost of an extracted expression: (unapplied redexes, e-nodes).
#[derive(Debug)]
pub struct WardCost {
    /// Canonical e-nodes matched by a rule's left side.
    pub redexes: HashSet<Ward>,
}

impl CostFunction<Ward> for WardCost {
    type Cost = (usize, usize);

    fn cost<C>(&mut self, enode: &Ward, mut costs: C) -> Self::Cost
    where
        C: FnMut(Id) -> Self::Cost,
    {
        let own = usize::from(self.redexes.contains(enode));
        enode.fold((own, 1), |(r, s), id| {
            let (cr, cs) = costs(id);
            (r.saturating_add(cr), s.saturating_add(cs))
        })
    }
}
