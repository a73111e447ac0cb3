//! What checking a file found, as data: one [`Statement`] per statement
//! (and per sampled configuration of a numeric one), each with a typed
//! [`Finding`] and a [`Status`] from one vocabulary.
//!
//! The status alone drives the closing line, the JSON counts and the exit
//! code ([`Tally`]); the renderers in [`crate::report`] (text, LaTeX, JSON)
//! are functions of these values and nothing else. Every field a renderer
//! shows is here; the JSON document is these types written by serde (its
//! schema is `docs/report.schema.json`).
//!
//! The vocabulary (docs/conventions.md §6):
//!
//! | status | meaning | finer words it replaces |
//! |---|---|---|
//! | `proved` | the rules (or normalisation) prove it as distributions | |
//! | `proved_away` | proved away from coincident points only | |
//! | `confirmed` | confirmed numerically on the model, not proved | `agree` (compare, scan, decompose), `holds` (flux), `confirmed` (steps) |
//! | `not_proved` | refuted: the search saturated with a remainder, or the numbers disagree | `disagree`, `fails` |
//! | `unknown` | neither: a limit was reached, or a number is not known | `stopped at …`, `not known: …` |

use std::collections::BTreeMap;
use std::fmt;
use std::sync::Arc;

use serde::{Serialize, Serializer};

use crate::context::Context;
use crate::egraph::Stop;
use crate::numeric::agreement::{Agreement, Value};
use crate::syntax::ast::Span;
use crate::term::print::{Printer, Style};
use crate::term::Term;

/// The one status vocabulary of every verdict.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Proved by the rules and normalisation, as distributions.
    Proved,
    /// Proved away from coincident points, where derivatives of explicit
    /// functions were taken pointwise.
    ProvedAway,
    /// Not proved, but confirmed numerically on the file's model.
    Confirmed,
    /// Refuted: the rules saturated with a remainder, or the numbers
    /// disagree.
    NotProved,
    /// Neither proved nor refuted: a limit was reached, or a number is not
    /// known (the reason is in the finding).
    Unknown,
}

impl Status {
    /// The words of the closing line.
    pub fn words(self) -> &'static str {
        match self {
            Status::Proved => "proved",
            Status::ProvedAway => "proved away from coincident points",
            Status::Confirmed => "confirmed numerically",
            Status::NotProved => "not proved",
            Status::Unknown => "unknown",
        }
    }

    /// True for the three statuses that pass.
    pub fn holds(self) -> bool {
        matches!(
            self,
            Status::Proved | Status::ProvedAway | Status::Confirmed
        )
    }

    /// The status of a numeric verdict: agreement confirms, disagreement
    /// refutes.
    pub fn of_agreement(a: &Agreement) -> Status {
        match a {
            Agreement::Agree => Status::Confirmed,
            Agreement::Disagree => Status::NotProved,
            Agreement::Unknown(_) => Status::Unknown,
        }
    }

    /// The status of a claim checked by the engine: a remainder after a
    /// run that stopped on a limit is unknown, not a refutation.
    pub fn of_verdict(v: &crate::engine::Verdict) -> Status {
        use crate::engine::Verdict;
        match v {
            Verdict::Proved(_) => Status::Proved,
            Verdict::ProvedAway(_) => Status::ProvedAway,
            Verdict::NotProved(s) if s.stop.is_saturated() => Status::NotProved,
            Verdict::NotProved(_) => Status::Unknown,
        }
    }

    /// Several verdicts together (the steps of a derivation): a refutation
    /// wins, then an unknown, then the weakest way of holding.
    pub fn combine(statuses: impl IntoIterator<Item = Status>) -> Option<Status> {
        let rank = |s: Status| match s {
            Status::Proved => 0,
            Status::ProvedAway => 1,
            Status::Confirmed => 2,
            Status::Unknown => 3,
            Status::NotProved => 4,
        };
        statuses.into_iter().max_by_key(|s| rank(*s))
    }
}

impl fmt::Display for Status {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.words())
    }
}

/// An expression of an outcome: a term with the declarations it is
/// printed with. In JSON `{"text": "…", "latex": "…"}`, the text in the
/// input syntax (it parses back to the same term).
#[derive(Clone)]
pub struct Expr {
    term: Term,
    ctx: Arc<Context>,
}

impl Expr {
    pub fn new(term: Term, ctx: Arc<Context>) -> Expr {
        Expr { term, ctx }
    }

    pub fn term(&self) -> &Term {
        &self.term
    }

    pub fn is_zero(&self) -> bool {
        self.term.is_zero()
    }

    /// The expression on one line in a style.
    pub fn print(&self, style: Style) -> String {
        Printer::new(&self.ctx, style).term(&self.term)
    }

    /// The terms of a top-level sum, each with its sign.
    pub fn terms(&self, style: Style) -> Vec<String> {
        Printer::new(&self.ctx, style).terms(&self.term)
    }
}

impl fmt::Debug for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.print(Style::Unicode))
    }
}

impl Serialize for Expr {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let mut m = s.serialize_struct("Expr", 2)?;
        m.serialize_field("text", &self.print(Style::Unicode))?;
        m.serialize_field("latex", &self.print(Style::Latex))?;
        m.end()
    }
}

/// A coincidence a result does not cover: it holds where this is not so.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Coincidence {
    /// Two points (`x ≠ x1`), named as written, sorted; a projection ends
    /// in `∥`.
    Points { a: String, b: String },
    /// The zeros of an expression (`x - x1 ≠ 0`).
    Zeros { expr: Expr },
}

impl Coincidence {
    /// The coincidences of a normalisation's caveats, without repeats.
    pub fn of(caveats: &crate::normal::Caveats, ctx: &Arc<Context>) -> Vec<Coincidence> {
        use crate::normal::Singular;
        let mut out: Vec<Coincidence> = Vec::new();
        let mut seen: Vec<String> = Vec::new();
        for c in caveats {
            let found = match &c.at {
                Singular::Point(p) => {
                    let mut pair = [point_name(&c.var), point_name(p)];
                    pair.sort();
                    let [a, b] = pair;
                    Coincidence::Points { a, b }
                }
                Singular::Zeros(t) => Coincidence::Zeros {
                    expr: Expr::new(t.clone(), ctx.clone()),
                },
            };
            let text = found.print(Style::Unicode);
            if !seen.contains(&text) {
                seen.push(text);
                out.push(found);
            }
        }
        out
    }

    /// `x ≠ x1` (`x \neq x_{1}` in LaTeX).
    pub fn print(&self, style: Style) -> String {
        match (self, style) {
            (Coincidence::Points { a, b }, Style::Latex) => {
                format!("{} \\neq {}", latex_point(a), latex_point(b))
            }
            (Coincidence::Points { a, b }, _) => format!("{a} ≠ {b}"),
            (Coincidence::Zeros { expr }, Style::Latex) => {
                format!("{} \\neq 0", expr.print(style))
            }
            (Coincidence::Zeros { expr }, _) => format!("{} ≠ 0", expr.print(style)),
        }
    }
}

/// A point as written: `x1`, or `x∥` for a projection.
fn point_name(p: &crate::term::Point) -> String {
    if p.par {
        format!("{}∥", p.name)
    } else {
        p.name.to_string()
    }
}

/// A point name of a [`Coincidence`] in LaTeX.
pub(crate) fn latex_point(name: &str) -> String {
    match name.strip_suffix('∥') {
        Some(base) => format!("{}_\\parallel", crate::term::latex::name(base)),
        None => crate::term::latex::name(name),
    }
}

/// What a run of the engine did: why it stopped and how far it went.
#[derive(Clone, Debug, Serialize)]
pub struct Search {
    pub stop: Stop,
    pub rounds: usize,
    pub iterations: usize,
    /// The largest e-graph of any round, in e-nodes.
    pub e_nodes: usize,
    /// Rules applied, with counts, sorted by name.
    pub rules: BTreeMap<String, usize>,
}

impl Search {
    pub fn of(s: &crate::engine::Simplified) -> Search {
        Search {
            stop: s.stop.clone(),
            rounds: s.rounds,
            iterations: s.iterations,
            e_nodes: s.nodes,
            rules: s.applied.clone(),
        }
    }
}

/// The values of the free indices of one component (`{"nu": 0}`; empty
/// for a scalar).
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Indices(pub Vec<(String, usize)>);

impl Serialize for Indices {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut m = s.serialize_map(Some(self.0.len()))?;
        for (k, v) in &self.0 {
            m.serialize_entry(k, v)?;
        }
        m.end()
    }
}

/// One checked statement (or one configuration of a sampled numeric
/// statement).
#[derive(Clone, Debug, Serialize)]
pub struct Statement {
    /// 1-based line of the statement.
    pub line: usize,
    /// The statement as written, on one line, without its keyword.
    pub input: String,
    /// The statement's verdict; `null` for statements that state nothing
    /// (`simplify` without `expect`, `evaluate`, `solve`, `classify`).
    pub status: Option<Status>,
    /// For a numeric statement under `sample N`: the configuration.
    pub sample: Option<Sample>,
    /// For a statement marked `slip`: whether the slip was caught.
    pub slip: Option<SlipMark>,
    #[serde(flatten)]
    pub finding: Finding,
    /// Where the statement is in the source.
    #[serde(skip)]
    pub span: Span,
}

impl Statement {
    pub fn new(line: usize, input: String, span: Span, finding: Finding) -> Statement {
        Statement {
            line,
            input,
            status: finding.status(),
            sample: None,
            slip: None,
            finding,
            span,
        }
    }

    /// The statement's keyword (`claim`, `compare`, …).
    pub fn keyword(&self) -> &str {
        self.finding.keyword()
    }
}

/// One configuration of `sample N`: its number (from 1) and every point's
/// coordinates.
#[derive(Clone, Debug, Serialize)]
pub struct Sample {
    pub index: usize,
    pub points: Vec<PointAt>,
}

/// A point and its coordinates.
#[derive(Clone, Debug, Serialize)]
pub struct PointAt {
    pub point: String,
    pub coordinates: Vec<f64>,
}

impl PointAt {
    pub fn list(points: &[(String, Vec<f64>)]) -> Vec<PointAt> {
        points
            .iter()
            .map(|(p, c)| PointAt {
                point: p.clone(),
                coordinates: c.clone(),
            })
            .collect()
    }
}

/// A statement marked `slip` is expected to be refuted.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SlipMark {
    /// Refuted, as marked.
    Caught,
    /// It holds: nothing is caught.
    Holds,
    /// A limit stopped the search before it was refuted.
    Open,
}

/// What one statement found. In JSON the `kind` names the variant.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Finding {
    /// `simplify E` (in `simplify` mode).
    Simplify(Simplification),
    /// `simplify E expect R` (in `check` mode).
    Expect(Expectation),
    Claim(ClaimCheck),
    Derivation(Derivation),
    Classify(Classification),
    Evaluate(Evaluated),
    Solve(Solved),
    Flux(FluxChecked),
    Compare(Compared),
    Scan(Scanned),
    Decompose(Decomposed),
    /// `perturb ⟨X⟩ by g O on boundary … to order N`.
    Perturb(Perturbed),
    /// `structures ⟨…⟩`, `decompose ⟨…⟩ in structures`.
    Structures(StructuresFound),
    /// A numeric statement that could not be carried out (a quadrature
    /// that did not converge, a value without a real value, …): unknown.
    Failed(Failure),
}

impl Finding {
    /// The verdict this finding carries, if it states something.
    pub fn status(&self) -> Option<Status> {
        match self {
            Finding::Simplify(_) | Finding::Classify(_) | Finding::Solve(_) => None,
            Finding::Expect(e) => Some(e.check.status),
            Finding::Claim(c) => Some(c.check.status),
            Finding::Derivation(d) => Status::combine(d.steps.iter().map(|s| s.status)),
            Finding::Evaluate(e) => e.lost.as_ref().map(|_| Status::Unknown),
            Finding::Flux(f) => Some(Status::of_agreement(&f.verdict)),
            Finding::Compare(c) => Some(Status::of_agreement(&c.verdict)),
            Finding::Scan(s) => Some(Status::of_agreement(&s.verdict)),
            Finding::Decompose(d) => Some(if d.holds {
                Status::Confirmed
            } else {
                Status::NotProved
            }),
            Finding::Perturb(p) => p.verdict.as_ref().map(Status::of_agreement),
            Finding::Structures(s) => Some(if s.holds {
                Status::Confirmed
            } else {
                Status::NotProved
            }),
            Finding::Failed(_) => Some(Status::Unknown),
        }
    }

    /// The statement's keyword.
    pub fn keyword(&self) -> &str {
        match self {
            Finding::Simplify(_) | Finding::Expect(_) => "simplify",
            Finding::Claim(_) => "claim",
            Finding::Derivation(_) => "derivation",
            Finding::Classify(_) => "classify",
            Finding::Evaluate(_) => "evaluate",
            Finding::Solve(_) => "solve",
            Finding::Flux(_) => "flux",
            Finding::Compare(_) => "compare",
            Finding::Scan(_) => "scan",
            Finding::Decompose(_) => "decompose",
            Finding::Perturb(_) => "perturb",
            Finding::Structures(s) => {
                if s.fit.is_some() {
                    "decompose"
                } else {
                    "structures"
                }
            }
            Finding::Failed(f) => &f.statement,
        }
    }
}

/// A normal form.
#[derive(Clone, Debug, Serialize)]
pub struct Simplification {
    /// The expression as lowered.
    pub expr: Expr,
    pub result: Expr,
    /// Where the normal form holds only away from these coincidences.
    pub away_from: Vec<Coincidence>,
    pub search: Search,
}

/// The engine's check of `L = R` (L - R simplified).
#[derive(Clone, Debug, Serialize)]
pub struct Check {
    pub status: Status,
    /// L - R in normal form: 0 when proved; contact terms at the
    /// coincidences when proved away from them.
    pub remainder: Expr,
    pub away_from: Vec<Coincidence>,
    pub search: Search,
}

impl Check {
    pub fn of(v: &crate::engine::Verdict, ctx: &Arc<Context>) -> Check {
        let s = v.simplified();
        Check {
            status: Status::of_verdict(v),
            remainder: Expr::new(s.term.clone(), ctx.clone()),
            away_from: Coincidence::of(&s.caveats, ctx),
            search: Search::of(s),
        }
    }
}

/// `simplify E expect R`.
#[derive(Clone, Debug, Serialize)]
pub struct Expectation {
    pub expr: Expr,
    pub expected: Expr,
    pub check: Check,
    /// When it does not hold: the normal form of E, which `test --accept`
    /// writes in place of R.
    pub replacement: Option<Expr>,
    /// Where R is written.
    #[serde(skip)]
    pub expect_span: Option<Span>,
}

/// `claim L = R`.
#[derive(Clone, Debug, Serialize)]
pub struct ClaimCheck {
    pub lhs: Expr,
    pub rhs: Expr,
    pub check: Check,
}

/// `classify ε`: whether the boundary preserves a conformal Killing vector.
#[derive(Clone, Debug, Serialize)]
pub struct Classification {
    pub generator: String,
    pub family: String,
    /// ε[n] vanishes on the boundary.
    pub preserved: bool,
    /// ε[n] on the boundary.
    pub normal_component: Expr,
}

/// A derivation, step by step.
#[derive(Clone, Debug, Serialize)]
pub struct Derivation {
    pub name: String,
    pub start: Expr,
    pub steps: Vec<Step>,
}

/// One step of a derivation, checked against the one before it.
#[derive(Clone, Debug, Serialize)]
pub struct Step {
    /// 1-based number of the step.
    pub step: usize,
    pub line: usize,
    pub expr: Expr,
    /// What the author cited after `by`.
    pub cited: Vec<String>,
    pub status: Status,
    /// Proved: the rules that fired (empty: normalisation alone).
    pub rules: Vec<String>,
    /// Proved: cited rules that did not fire.
    pub unused_citations: Vec<String>,
    /// Proved with the model's correlators in place of the correlators.
    pub in_model: bool,
    /// Proved away from these coincidences only.
    pub away_from: Vec<Coincidence>,
    /// Proved away from coincident points, where the steps differ by these
    /// contact terms, which nothing checked.
    pub unchecked_contact: Option<Expr>,
    /// Not proved: what the slip is.
    pub slip: Option<Slip>,
    /// Not proved or unknown: the step before minus this step.
    pub remainder: Option<Expr>,
    /// Unknown: the limit the search stopped at.
    pub stop: Option<Stop>,
    /// Confirmed: on this many configurations of the model.
    pub samples: Option<usize>,
    /// What the model said about a step the rules did not prove.
    pub numeric: Option<StepNumeric>,
    /// Proved away from coincident points, then the contact terms there
    /// confirmed numerically.
    pub proved_away_first: bool,
}

/// How a refuted step differs from the one before it, when it is a common
/// slip.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "slip", rename_all = "snake_case")]
pub enum Slip {
    /// This step is minus the one before.
    Sign,
    /// The step before is `ratio` times this one.
    Factor { ratio: Expr },
    /// The contact term at an insertion is missing, extra or different.
    Contact { at: String, change: Change },
    /// The steps differ in one term (`term` null: the constant term).
    Term {
        term: Option<Expr>,
        change: TermChange,
    },
    /// The contact terms at the coincident points differ (found
    /// numerically after a proof away from them).
    ContactTerms,
    /// None of these: the remainder is the difference.
    Remainder,
}

/// How a contact term differs.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Change {
    Missing,
    Extra,
    Coefficient,
}

/// How one term differs.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "change", rename_all = "snake_case")]
pub enum TermChange {
    Missing,
    Extra,
    Coefficient { before: Expr, after: Expr },
}

/// What the model found for a step the rules did not prove.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "finding", rename_all = "snake_case")]
pub enum StepNumeric {
    /// Some configuration could not be evaluated.
    NotEvaluated { reason: String },
    /// At a configuration a value is not known.
    Undecided {
        configuration: usize,
        reason: String,
    },
    /// The steps differ: at the first configuration where they do, the
    /// points the steps mention and both values; the common ratio when
    /// they differ by one factor everywhere.
    Differs {
        at: Vec<PointAt>,
        before: Option<f64>,
        after: Option<f64>,
        ratio: Option<Ratio>,
    },
    /// The flux check could not run (or a value in it is not known).
    FluxNotChecked {
        configuration: Option<usize>,
        around: Option<String>,
        reason: String,
    },
    /// Around an insertion, the flux differs from the contact terms.
    FluxDiffers {
        configuration: usize,
        around: String,
        radius: f64,
        flux: Option<f64>,
        contact: Option<f64>,
    },
    /// Away from the insertions the divergence is not 0.
    NotConserved {
        configuration: usize,
        divergence: f64,
    },
    /// Around each insertion the flux equals the contact terms, and away
    /// from them the divergence vanishes.
    FluxConfirmed,
}

impl StepNumeric {
    /// Findings of the flux check that refute the step.
    pub fn refutes_by_flux(&self) -> bool {
        matches!(
            self,
            StepNumeric::FluxDiffers { .. } | StepNumeric::NotConserved { .. }
        )
    }
}

/// A common ratio of two steps, and the fraction with a small denominator
/// it equals, if one does.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct Ratio {
    pub value: f64,
    /// (numerator, denominator).
    pub fraction: Option<(i64, i64)>,
}

/// `evaluate E`: one value per component.
#[derive(Clone, Debug, Serialize)]
pub struct Evaluated {
    pub components: Vec<Component>,
    /// Why a value is not known (then the statement is unknown).
    pub lost: Option<String>,
}

/// One component's value.
#[derive(Clone, Debug, Serialize)]
pub struct Component {
    pub index: Indices,
    pub value: Value,
}

/// `solve a from L = R`.
#[derive(Clone, Debug, Serialize)]
pub struct Solved {
    pub unknown: String,
    pub value: f64,
    /// The component of the equation that fixed the value.
    pub component: Indices,
    /// Largest |left - right| over all components at the solution.
    pub residual: f64,
    /// The exact value, when the algebra settles it.
    pub exact: Option<Expr>,
    /// Where the equation with the exact value holds only away from these.
    pub exact_away_from: Vec<Coincidence>,
}

/// `perturb ⟨X⟩ by g O on boundary … to order N` (docs/conventions.md
/// §17): each order's correction at the coupling, their sum, and the
/// `expect`s checked by the agreement rule.
#[derive(Clone, Debug, Serialize)]
pub struct Perturbed {
    /// The coupling's value.
    pub coupling: f64,
    /// Orders 0 (the unperturbed correlator) to N.
    pub orders: Vec<crate::numeric::perturb::OrderTerm>,
    /// The sum of the orders.
    pub total: Value,
    pub expects: Vec<PerturbExpected>,
    /// All expects together; none without an `expect`.
    pub verdict: Option<Agreement>,
}

/// One `expect order n = E` (`order` n) or `expect total = E` (no order).
#[derive(Clone, Debug, Serialize)]
pub struct PerturbExpected {
    pub order: Option<usize>,
    pub computed: Value,
    pub expected: Value,
    pub relative_difference: f64,
    pub verdict: Agreement,
}

/// `compare L = R`, component by component.
#[derive(Clone, Debug, Serialize)]
pub struct Compared {
    pub verdict: Agreement,
    pub components: Vec<ComparedComponent>,
}

/// Both sides of one component.
#[derive(Clone, Debug, Serialize)]
pub struct ComparedComponent {
    pub index: Indices,
    pub left: Value,
    pub right: Value,
    pub relative_difference: f64,
    pub verdict: Agreement,
}

/// `flux ∂(x) F = R radius r`: insertion by insertion, and conservation
/// away from them.
#[derive(Clone, Debug, Serialize)]
pub struct FluxChecked {
    pub verdict: Agreement,
    pub around: Vec<FluxAround>,
    pub away: Vec<FluxAway>,
    /// The insertions whose flux does not equal their contact terms.
    pub failing_insertions: Vec<String>,
}

/// The flux through the sphere around one insertion against the contact
/// terms there.
#[derive(Clone, Debug, Serialize)]
pub struct FluxAround {
    pub point: String,
    pub verdict: Agreement,
    pub components: Vec<FluxComponent>,
}

#[derive(Clone, Debug, Serialize)]
pub struct FluxComponent {
    pub index: Indices,
    pub flux: Value,
    pub contact: Value,
}

/// The divergence at a point away from the insertions, against
/// |current|/r there.
#[derive(Clone, Debug, Serialize)]
pub struct FluxAway {
    pub at: Vec<f64>,
    pub divergence: Value,
    pub scale: f64,
    pub verdict: Agreement,
}

/// `scan p from a to b steps n: L = R [into "name"]`.
#[derive(Clone, Debug, Serialize)]
pub struct Scanned {
    pub param: String,
    /// One label per component (`nu=0`; empty for a scalar).
    pub labels: Vec<String>,
    pub verdict: Agreement,
    pub rows: Vec<ScanRow>,
    /// The first row where the sides differ, else the first not known.
    pub first: Option<ScanFirst>,
    /// The CSV and SVG files written.
    pub written: Vec<String>,
    /// The stem after `into`, as written.
    #[serde(skip)]
    pub output: Option<String>,
    /// The table itself, for the files.
    #[serde(skip)]
    pub table: crate::numeric::session::Scan,
    /// The words on the figure of the files.
    #[serde(skip)]
    pub figure: crate::plot::Labels,
}

/// One row of a scan: both sides per component, their error estimates,
/// relative difference and verdict.
#[derive(Clone, Debug, Serialize)]
pub struct ScanRow {
    pub x: f64,
    pub left: Vec<f64>,
    pub right: Vec<f64>,
    pub left_error: Vec<f64>,
    pub right_error: Vec<f64>,
    pub relative_difference: Vec<f64>,
    pub verdicts: Vec<Agreement>,
}

#[derive(Clone, Debug, Serialize)]
pub struct ScanFirst {
    pub x: f64,
    pub verdict: Agreement,
}

impl Scanned {
    pub fn of(
        scan: crate::numeric::session::Scan,
        output: Option<String>,
        figure: crate::plot::Labels,
    ) -> Scanned {
        let verdict = scan
            .judged
            .iter()
            .flatten()
            .fold(Agreement::Agree, |all, (_, v)| all.and(v.clone()));
        let first = |unknown: bool| {
            scan.rows
                .iter()
                .zip(&scan.judged)
                .find_map(|((x, _, _), row)| {
                    row.iter()
                        .find(|(_, v)| !v.agrees() && v.is_unknown() == unknown)
                        .map(|(_, v)| ScanFirst {
                            x: *x,
                            verdict: v.clone(),
                        })
                })
        };
        let first = first(false).or_else(|| first(true));
        let rows = scan
            .rows
            .iter()
            .enumerate()
            .map(|(k, (x, l, r))| {
                let judged = scan.judged.get(k).cloned().unwrap_or_default();
                let (le, re) = scan.errors.get(k).cloned().unwrap_or_default();
                ScanRow {
                    x: *x,
                    left: l.clone(),
                    right: r.clone(),
                    left_error: le,
                    right_error: re,
                    relative_difference: judged.iter().map(|(d, _)| *d).collect(),
                    verdicts: judged.into_iter().map(|(_, v)| v).collect(),
                }
            })
            .collect();
        Scanned {
            param: scan.param.clone(),
            labels: scan.labels.clone(),
            verdict,
            rows,
            first,
            written: Vec::new(),
            output,
            table: scan,
            figure,
        }
    }
}

/// `decompose ⟨O O⟩ in CHANNEL blocks …`.
#[derive(Clone, Debug, Serialize)]
pub struct Decomposed {
    #[serde(flatten)]
    pub fit: crate::numeric::decompose::Decomposition,
    /// The residual is within the tolerance.
    pub holds: bool,
    /// The CSV and SVG files written.
    pub written: Vec<String>,
    #[serde(skip)]
    pub output: Option<String>,
}

/// `structures ⟨…⟩`: the structures, their count against the residual
/// symmetry's, the cross-ratios, the conservation relations; with `decompose
/// ⟨…⟩ in structures` also the model's coefficient functions.
#[derive(Clone, Debug, Serialize)]
pub struct StructuresFound {
    pub listing: crate::numeric::structures::Listing,
    pub fit: Option<crate::numeric::structures::StructureFit>,
    /// The count agrees with the symmetry's, every relation was derived,
    /// and a decomposition is exact.
    pub holds: bool,
    /// Seconds spent (listing and relations; the decomposition).
    pub seconds: (f64, f64),
    /// The CSV and SVG files written.
    pub written: Vec<String>,
    #[serde(skip)]
    pub output: Option<String>,
}

/// A numeric statement that could not be carried out.
#[derive(Clone, Debug, Serialize)]
pub struct Failure {
    /// The statement's keyword.
    pub statement: String,
    pub reason: String,
}

/// What to do with the statements of a file.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Mode {
    /// Print every `simplify` statement's normal form.
    Simplify,
    /// Prove every `claim` and every `simplify … expect …`.
    Check,
}

/// The counts of a check: every verdict once (each step of a derivation,
/// each configuration of a sampled statement), by status; slips caught
/// apart.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
pub struct Tally {
    pub proved: usize,
    pub proved_away: usize,
    pub confirmed: usize,
    /// Statements marked `slip` that were refuted, as marked (a derivation
    /// counts its refuted steps).
    pub slips_caught: usize,
    pub not_proved: usize,
    pub unknown: usize,
}

impl Tally {
    fn add(&mut self, s: Status) {
        match s {
            Status::Proved => self.proved += 1,
            Status::ProvedAway => self.proved_away += 1,
            Status::Confirmed => self.confirmed += 1,
            Status::NotProved => self.not_proved += 1,
            Status::Unknown => self.unknown += 1,
        }
    }

    /// Counts the verdicts of a check. A statement marked `slip` that was
    /// caught counts its refutations as caught; one that holds counts as
    /// not proved (the mark is wrong); one left open by a limit counts its
    /// verdicts as they are.
    pub fn of(statements: &[Statement]) -> Tally {
        let mut t = Tally::default();
        for s in statements {
            let statuses: Vec<Status> = match &s.finding {
                Finding::Derivation(d) => d.steps.iter().map(|s| s.status).collect(),
                _ => s.status.into_iter().collect(),
            };
            match s.slip {
                Some(SlipMark::Caught) => {
                    for status in statuses {
                        if status == Status::NotProved {
                            t.slips_caught += 1;
                        } else {
                            t.add(status);
                        }
                    }
                }
                Some(SlipMark::Holds) => {
                    // The mark is wrong: one failure (a derivation's steps
                    // still count as they are).
                    if matches!(s.finding, Finding::Derivation(_)) {
                        statuses.into_iter().for_each(|st| t.add(st));
                    }
                    t.not_proved += 1;
                }
                Some(SlipMark::Open) | None => statuses.into_iter().for_each(|st| t.add(st)),
            }
        }
        t
    }

    /// 0 when everything holds (or was caught as marked), 1 when something
    /// is not proved or unknown.
    pub fn exit_code(&self) -> i32 {
        i32::from(self.not_proved + self.unknown > 0)
    }

    /// The closing line: `3 proved, 1 confirmed numerically, 0 not proved`.
    pub fn summary(&self) -> String {
        let mut parts = vec![format!("{} proved", self.proved)];
        if self.proved_away > 0 {
            parts.push(format!(
                "{} proved away from coincident points",
                self.proved_away
            ));
        }
        if self.confirmed > 0 {
            parts.push(format!("{} confirmed numerically", self.confirmed));
        }
        if self.slips_caught > 0 {
            parts.push(format!("{} slip(s) caught", self.slips_caught));
        }
        parts.push(format!("{} not proved", self.not_proved));
        if self.unknown > 0 {
            parts.push(format!("{} unknown", self.unknown));
        }
        parts.join(", ")
    }
}

/// Everything checking one file found.
#[derive(Clone, Debug, Serialize)]
pub struct FileOutcome {
    /// The file's name as given.
    pub file: String,
    pub mode: Mode,
    /// The model numeric statements use, if any was built.
    pub model: Option<String>,
    /// The statement before which the model was built (for the text
    /// report's `model:` line).
    #[serde(skip)]
    pub model_before: usize,
    #[serde(rename = "items")]
    pub statements: Vec<Statement>,
    /// The counts (all zero in `simplify` mode, which states nothing).
    #[serde(flatten)]
    pub tally: Tally,
    pub exit_code: i32,
    /// The file has no statement at all (declarations only).
    pub nothing_to_check: bool,
}

impl FileOutcome {
    /// Counts the statements (in `check` mode) and sets the exit code.
    pub fn new(
        file: String,
        mode: Mode,
        model: Option<(String, usize)>,
        statements: Vec<Statement>,
        nothing_to_check: bool,
    ) -> FileOutcome {
        let tally = if mode == Mode::Check {
            Tally::of(&statements)
        } else {
            Tally::default()
        };
        let (model, model_before) = match model {
            Some((m, k)) => (Some(m), k),
            None => (None, 0),
        };
        FileOutcome {
            file,
            mode,
            model,
            model_before,
            statements,
            exit_code: tally.exit_code(),
            tally,
            nothing_to_check,
        }
    }
}
