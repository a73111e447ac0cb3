//! The e-graph phase: the language of e-nodes, the exact constant-folding
//! analysis, conversion between terms and e-classes, the extraction cost,
//! and the run of the Ward rules with explicit limits.
//!
//! Sums, products and correlators are n-ary e-nodes whose children arrive
//! already in canonical order (terms are normalised before they are added,
//! and rule appliers sort what they build), so no associativity or
//! commutativity rule ever runs.

mod convert;
mod cost;
mod fold;
mod run;

use egg::{define_language, Id, Symbol};
use num_rational::BigRational;

pub use convert::{add_term, extract_term};
pub use cost::WardCost;
pub use fold::Fold;
pub use run::{run_rules, Limits, RunReport, Stop};

define_language! {
    /// E-nodes. Names (parameters, points, indices, operator names) are
    /// `Name` leaves; what a name means follows from its position.
    pub enum Ward {
        "+" = Add(Box<[Id]>),
        "*" = Mul(Box<[Id]>),
        "^" = Pow([Id; 2]),
        "corr" = Corr(Box<[Id]>),
        // [name, point, index…]
        "op" = Op(Box<[Id]>),
        // [index, point, body]
        "der" = Der([Id; 3]),
        "kron" = Kron([Id; 2]),
        "normal" = Normal(Id),
        "delta" = DeltaFn([Id; 2]),
        "delta-y" = DeltaY(Id),
        "par" = Par(Id),
        "dist" = Dist([Id; 2]),
        // [name, order, argument…]
        "fun" = Fun(Box<[Id]>),
        // [point, index]
        "comp" = Comp([Id; 2]),
        // [name, index…]
        "param" = Param(Box<[Id]>),
        "out-normal" = OutNormal(Id),
        // [variable, region, body]; regions are the names `space`,
        // `halfspace`, `boundary` or a `ball` node.
        "int" = Integral([Id; 3]),
        "surface-int" = Surface([Id; 3]),
        // [center, radius]
        "ball" = Ball([Id; 2]),
        Num(BigRational),
        Name(Symbol),
    }
}

/// The e-graph type used throughout.
pub type EGraph = egg::EGraph<Ward, Fold>;
