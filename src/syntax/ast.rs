//! The abstract syntax tree of `.ward` and `.rules` files: types only.
//!
//! Every node carries the byte span of the text it came from, so that any
//! later stage can point at the offending characters.

use num_rational::BigRational;

/// The channel of a block expansion next to a wall.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Channel {
    /// Bulk operators exchanged (x1 → x2): the identity and bulk blocks.
    Bulk,
    /// Boundary operators exchanged (each point → the wall).
    Boundary,
    /// The s-channel of a four-point function without a wall (x1 → x2),
    /// blocks `g_block(Δ, ℓ; z, z̄)`.
    SChannel,
}

/// The exchanged dimensions of a block expansion.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum BlockDims {
    List(Vec<Expr>),
    /// first, last and step (1 when not written).
    Tower(Box<(Expr, Expr, Option<Expr>)>),
    /// The s-channel's towers of twists and of spins, and Δ12, Δ34 when
    /// written.
    TwistSpin(
        Box<[(Expr, Expr, Option<Expr>); 2]>,
        Option<Box<(Expr, Expr)>>,
    ),
}

/// A byte range in one source text.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Default)]
pub struct Span {
    pub start: usize,
    pub end: usize,
}

impl Span {
    pub fn new(start: usize, end: usize) -> Span {
        Span { start, end }
    }
    /// The smallest span covering both.
    pub fn to(self, other: Span) -> Span {
        Span::new(self.start.min(other.start), self.end.max(other.end))
    }
}

/// A name as written: an identifier, or a rule variable such as `?x`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Name {
    pub text: String,
    /// True for a rule variable (`?x`); `text` then holds the name without `?`.
    pub is_var: bool,
    pub span: Span,
}

/// A point argument: `x1`, `par(x)` / `x∥`, or `?p` in rules.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PointRef {
    pub name: Name,
    /// True for the boundary projection `par(x)` of a bulk point.
    pub par: bool,
    pub span: Span,
}

/// An operator insertion `NAME[indices](point)`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct OpRef {
    pub name: Name,
    pub indices: Vec<Name>,
    pub point: PointRef,
    pub span: Span,
}

/// One element of a correlator: an insertion, or a rule's `...?rest`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Insertion {
    Op(OpRef),
    Splice(Name),
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BinOp {
    Add,
    Sub,
    Mul,
    Div,
    Pow,
}

#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Expr {
    pub kind: ExprKind,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ExprKind {
    /// An exact number; decimals are read exactly (`1.5` is 3/2).
    Num(BigRational),
    /// A parameter, the dimension `d`, or (wrongly placed) any other name.
    Name(Name),
    /// A rule variable in a term position: `?c`.
    Var(Name),
    /// An operator attribute in a rule template: `?o.dim`.
    Attr {
        var: Name,
        key: Name,
    },
    Neg(Box<Expr>),
    /// Operands joined left to right by operators of one precedence: `a +
    /// b - c` (`Add`, `Sub`) or `2 a / b` (`Mul`, `Div`; juxtaposition is
    /// `Mul`). N-ary, so that a long sum is not a deep tree.
    Chain {
        first: Box<Expr>,
        rest: Vec<(BinOp, Expr)>,
    },
    /// A power `a ^ b` (the only binary operator left nested: it is
    /// right-associative, and a tower of powers is deep as written).
    Binary {
        op: BinOp,
        lhs: Box<Expr>,
        rhs: Box<Expr>,
    },
    Corr(Vec<Insertion>),
    /// An operator outside a correlator (always an error in lowering).
    Op(OpRef),
    Deriv {
        index: Name,
        point: PointRef,
        body: Box<Expr>,
    },
    /// Kronecker delta `δ[mu,nu]`.
    Kron(Name, Name),
    /// The unit normal `n[mu]`.
    Normal(Name),
    /// Bulk delta function `δ(x - p)`.
    DeltaPoints(PointRef, PointRef),
    /// Boundary delta function `δ(y(x))`.
    DeltaNormal {
        coord: Name,
        point: PointRef,
    },
    /// Distance `|p - q|`.
    Distance(PointRef, PointRef),
    /// Length `|x1|`: the distance of a point to the origin.
    Length(PointRef),
    /// A component `x1[mu]` of a point, or of a parameter vector or tensor
    /// (`b[mu]`, `omega[mu,nu]`), or the outward normal `N[mu]`.
    Component {
        name: Name,
        /// `x∥[a]`: a component of the projection of x.
        par: bool,
        indices: Vec<Name>,
    },
    /// A function call `F(u)`, `F'(u)` (primes count derivatives),
    /// `F[1,0](u, v)` (derivatives by argument), or a built-in: `xi(x1, x2)`,
    /// `F21(a, b; c; z)`, the blocks `f_bulk(Δ; ξ)` and `f_bdy(Δ̂; ξ)`.
    Call {
        name: Name,
        primes: u32,
        /// `[1,0]` after the name: how often each argument is
        /// differentiated.
        orders: Option<Vec<u32>>,
        args: Vec<Expr>,
        /// The separator after each argument but the last: `,` or `;`.
        separators: Vec<char>,
    },
    /// `∫[x in REGION] { body }`, or with `surface`, `∮[x on REGION] { body }`.
    Integral {
        var: PointRef,
        region: RegionRef,
        surface: bool,
        body: Box<Expr>,
    },
    /// Rule template: `sum ?o(?p) in ?rest if COND { body }`, or with a
    /// slot `sum ?o[?r -> ?s](?p) in …` (one copy per index slot).
    Sum {
        op: Name,
        slot: Option<(Name, Name)>,
        point: Name,
        splice: Name,
        filter: Option<Condition>,
        body: Box<Expr>,
    },
}

/// A region of integration.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct RegionRef {
    pub kind: RegionKind,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Eq)]
pub enum RegionKind {
    /// All of R^d.
    Space,
    /// The half-space y >= 0.
    Halfspace,
    /// The boundary plane y = 0.
    Boundary,
    /// The ball around a point with a radius.
    Ball(PointRef, Box<Expr>),
}

/// The parameter of a translation or special conformal generator: a vector
/// parameter (possibly declared parallel to the boundary) or the normal `n`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum VectorParam {
    /// The normal `n`; `parallel` holds the span of a (wrong) `parallel`
    /// written after it.
    Normal {
        span: Span,
        parallel: Option<Span>,
    },
    Named {
        name: Name,
        parallel: bool,
    },
}

/// A model for numeric work, as written.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ModelSpec {
    /// Fixed conformal forms; `y_convention` for ⟨O⟩ = a/y^Δ instead of a/(2y)^Δ.
    Conformal { y_convention: bool },
    /// The free scalar: wall (`dirichlet`/`neumann`, none without a
    /// half-space), improved T unless `unimproved`, operator names → composites.
    FreeScalar {
        wall: Option<String>,
        /// `complex`: the complex field φ, φ̄ with its U(1) current.
        complex: bool,
        unimproved: bool,
        fields: Vec<(Name, String)>,
        /// `reflection r`: the reflection coefficient.
        reflection: Option<Box<Expr>>,
        /// `neumann coupling g` / `dirichlet coupling g`: the coupling to χ.
        coupling: Option<Box<Expr>>,
    },
    /// Generalised free fields, with a wall (`dirichlet`/`neumann` image
    /// sign) or without.
    Gff { wall: Option<String> },
}

/// Where a `place` statement puts a point.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PlaceKind {
    Inside,
    Outside,
    On,
}

/// A family of conformal Killing vectors.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Generator {
    /// ε_μ = a_μ.
    Translation(VectorParam),
    /// ε_μ = ω_{μν} x_ν, ω antisymmetric (parallel: ω_{nμ} = 0).
    Rotation { omega: Name, parallel: bool },
    /// ε_μ = n_μ (e·x) - e_μ (n·x), e parallel: the rotation mixing n with e.
    Mixing(Name),
    /// ε_μ = λ x_μ.
    Dilatation(Name),
    /// ε_μ = 2 (b·x) x_μ - x² b_μ.
    Special(VectorParam),
}

/// Kinds of operator a file may declare.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OpKind {
    Scalar,
    Vector,
    /// A symmetric traceless tensor; its spin is the `spin` attribute.
    Tensor,
}

/// One statement of a `.ward` file.
#[derive(Clone, Debug, PartialEq, Eq)]
// Statements are built once per file and matched once; their size does not
// matter, and boxing would only obscure the matches.
#[allow(clippy::large_enum_variant)]
pub enum Stmt {
    Dimension(Expr),
    Halfspace {
        coord: Name,
    },
    Operator {
        boundary: bool,
        kind: OpKind,
        name: Name,
        attrs: Vec<(Name, Expr)>,
    },
    Points {
        boundary: bool,
        names: Vec<Name>,
    },
    /// Names with the indices written after them (none for a scalar).
    Parameters(Vec<(Name, Vec<Name>)>),
    /// `positive r g`: parameters known to be positive (declared here if
    /// they are not yet).
    Positive(Vec<Name>),
    Parallel(Vec<Name>),
    Rules {
        path: String,
        span: Span,
    },
    Simplify {
        expr: Expr,
        expect: Option<Expr>,
        span: Span,
    },
    Claim {
        lhs: Expr,
        rhs: Expr,
        /// Marked `slip`: expected to be refuted.
        slip: bool,
        span: Span,
    },
    /// `function F G`: unknown functions of one variable.
    Functions(Vec<Name>),
    /// `let NAME = EXPR`: a named expression, substituted where it is used;
    /// `let NAME(t, …) = EXPR`: a function of its parameters.
    Let {
        name: Name,
        params: Vec<Name>,
        expr: Expr,
    },
    /// `killing eps GENERATOR`.
    Killing {
        name: Name,
        generator: Generator,
        span: Span,
    },
    /// `classify eps`: is the generator preserved by the boundary?
    Classify {
        name: Name,
        span: Span,
    },
    /// `place x2 outside ball(x1, r)`.
    Place {
        point: PointRef,
        kind: PlaceKind,
        region: RegionRef,
        span: Span,
    },
    /// `model …`: which model numeric statements use.
    Model {
        spec: ModelSpec,
        span: Span,
    },
    /// `coefficient <O O> = 1`: a coefficient of the conformal model.
    Coefficient {
        names: Vec<Name>,
        value: Expr,
        span: Span,
    },
    /// `values Delta = 1.3, b = (1, 0, 0)`.
    Values(Vec<(Name, Vec<Expr>)>),
    /// `evaluate EXPR`: its numeric value(s) in the model.
    Evaluate {
        expr: Expr,
        span: Span,
    },
    /// `structures ⟨…⟩` (`fit` false) or `decompose ⟨…⟩ in structures
    /// [into "name"]` (`fit` true).
    Structures {
        corr: Expr,
        fit: bool,
        output: Option<(String, Span)>,
        span: Span,
    },
    /// `decompose ⟨O(x1) O(x2)⟩ in bulk|boundary blocks … [into "name"]`.
    Decompose {
        corr: Expr,
        channel: Channel,
        dims: BlockDims,
        output: Option<(String, Span)>,
        span: Span,
    },
    /// `solve a from L = R`: the value of a parameter that makes both sides
    /// agree numerically.
    Solve {
        unknown: Name,
        lhs: Expr,
        rhs: Expr,
        span: Span,
    },
    /// `flux ∂[mu](x) { F } = R radius r`: the local identity checked by
    /// flux through a sphere around each insertion.
    Flux {
        lhs: Expr,
        rhs: Expr,
        radius: Expr,
        span: Span,
    },
    /// `scan p from a to b steps n: L = R [into "name"]`.
    Scan {
        param: Name,
        from: Expr,
        to: Expr,
        steps: Expr,
        lhs: Expr,
        rhs: Expr,
        output: Option<(String, Span)>,
        span: Span,
    },
    /// `derivation NAME start = step [by why] … end`.
    Derivation {
        name: Name,
        start: Expr,
        steps: Vec<(Expr, Vec<Name>)>,
        /// Marked `slip`: some step is expected to be refuted.
        slip: bool,
        span: Span,
    },
    /// `tolerance 1e-8`: the relative accuracy asked of quadrature.
    Tolerance {
        value: Expr,
        span: Span,
    },
    /// `sample N seed S`: N sets of seeded random positions.
    Sample {
        count: Expr,
        seed: Expr,
        span: Span,
    },
    /// `perturb ⟨X⟩ by g O1 O2 on boundary z1 z2 to order N [expect …]`:
    /// conformal perturbation theory in g ∫ O1 O2 over the wall.
    Perturb {
        corr: Expr,
        coupling: Expr,
        operators: Vec<Name>,
        points: Vec<Name>,
        order: Expr,
        /// `expect order n = E` (`Some(n)`) or `expect total = E` (`None`).
        expects: Vec<(Option<Expr>, Expr)>,
        span: Span,
    },
    /// `compare L = R`: both sides numerically in the model.
    Compare {
        lhs: Expr,
        rhs: Expr,
        span: Span,
    },
    /// `place ball(x1, r) inside halfspace`: the ball stays clear of the
    /// wall.
    PlaceBall {
        region: RegionRef,
        span: Span,
    },
    /// `place x2 at (0, 0, 3)`: numeric coordinates, the normal one last.
    Position {
        point: PointRef,
        coords: Vec<Expr>,
        span: Span,
    },
}

/// A parsed `.ward` file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct File {
    pub stmts: Vec<Stmt>,
}

/// A side condition of a rule.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Condition {
    pub kind: ConditionKind,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ConditionKind {
    /// The file declares a half-space.
    Halfspace,
    /// The file declares no boundary.
    NoHalfspace,
    /// `?v WORD`: a point is bulk/boundary, an index is bulk/parallel/normal,
    /// every insertion of a sequence is scalar.
    Is(Name, Property),
    /// `?rest has KEY`: every insertion of a sequence declares attribute KEY.
    Has(Name, Name),
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Property {
    Bulk,
    Boundary,
    Parallel,
    Normal,
    Scalar,
    /// Spin 1.
    Vector,
    /// Declared `conserved` (T always).
    Conserved,
    /// Declared spin ℓ (T has spin 2).
    Spin(u32),
    /// An operator with indices; a sequence with at least one.
    Spinning,
}

/// One rule of a `.rules` file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Rule {
    pub name: Name,
    pub conditions: Vec<Condition>,
    pub from: Expr,
    pub to: Expr,
    pub span: Span,
}

/// A named group of rules.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct RuleSet {
    pub name: Name,
    pub rules: Vec<Rule>,
}

/// A parsed `.rules` file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct RuleFile {
    pub sets: Vec<RuleSet>,
}
