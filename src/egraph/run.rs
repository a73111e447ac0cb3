//! Running rules on an e-graph with explicit limits, and reporting why the
//! run stopped.
//!
//! A run that stops on a limit is never a silent partial proof: the
//! [`Stop`] goes into every report, and anything but `Saturated` makes an
//! unproved claim "unknown" rather than false.

use std::collections::BTreeMap;
use std::time::Duration;

use egg::{
    Rewrite, RewriteScheduler, Runner, RunnerLimits, RunnerResult, SearchMatches, StopReason,
};

use super::{EGraph, Fold, Ward};

/// Limits for one e-graph run.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Limits {
    pub nodes: usize,
    pub iterations: usize,
    /// Steps of rule matching in one run, and again in the search for
    /// unapplied redexes after it (`budget::match_step`).
    pub matches: usize,
    /// A safety net only; tests never depend on it.
    pub time: Duration,
    /// Record explanations (named rules) for proofs.
    pub explanations: bool,
    /// Rounds of the engine's outer loop (e-graph, extraction,
    /// normalisation) before a simplification still changing stops with
    /// [`Stop::RoundLimit`].
    pub rounds: usize,
}

impl Default for Limits {
    fn default() -> Limits {
        Limits {
            nodes: 100_000,
            iterations: 40,
            matches: crate::budget::MAX_MATCH_STEPS,
            time: Duration::from_secs(60),
            explanations: false,
            rounds: 8,
        }
    }
}

/// Why a run stopped. In JSON: `{"kind": "node_limit", "limit": 100000}`.
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(tag = "kind", content = "limit", rename_all = "snake_case")]
pub enum Stop {
    /// No rule can add anything new.
    Saturated,
    IterationLimit(usize),
    NodeLimit(usize),
    /// The rule matching took its whole budget of steps.
    MatchLimit(usize),
    TimeLimit,
    /// The engine's outer loop (e-graph, extraction, normalisation) ran
    /// its rounds without reaching a fixpoint (`Limits::rounds`, 8).
    RoundLimit(usize),
    /// The normaliser produced more monomials than its budget
    /// ([`crate::budget::MAX_TERMS`]) while expanding the claim.
    TermLimit(usize),
    /// The index algebra met its step bound on a monomial
    /// (`CONTRACTION_STEPS`, 10,000): a defect, reported as unknown rather
    /// than as a half-contracted remainder.
    ContractionLimit(usize),
    Other(String),
    /// The rules saturated, but the remainder left is one the engine cannot
    /// tell from zero (see `Engine::check`): the reason.
    Undecided(String),
    /// The rules saturated, but a divergence or trace of a conserved
    /// operator is left that no loaded rule covers (a spinning insertion
    /// without a rule, say): which, as a sentence.
    Uncovered(String),
}

impl Stop {
    pub fn is_saturated(&self) -> bool {
        *self == Stop::Saturated
    }

    /// The normaliser gave up (term budget or contraction bound): the
    /// remainder is the difference as written, not a normal form.
    pub fn is_normaliser_limit(&self) -> bool {
        matches!(self, Stop::TermLimit(_) | Stop::ContractionLimit(_))
    }

    pub fn describe(&self) -> String {
        match self {
            Stop::Saturated => "saturated".into(),
            Stop::IterationLimit(n) => format!("stopped at the iteration limit ({n})"),
            Stop::NodeLimit(n) => format!("stopped at the e-node limit ({n})"),
            Stop::MatchLimit(n) => {
                format!("stopped: rule matching reached its limit (limit {n} steps)")
            }
            Stop::TimeLimit => "stopped at the time limit".into(),
            Stop::RoundLimit(n) => format!(
                "stopped at the round limit ({n} rounds of rules and normalisation without a fixpoint)"
            ),
            Stop::TermLimit(n) => format!(
                "stopped at its term budget ({n} monomials): the expansion grows past what can be checked"
            ),
            Stop::ContractionLimit(n) => format!(
                "stopped: an index contraction did not finish in {n} steps (a defect in the index algebra; please report the file)"
            ),
            Stop::Other(s) => format!("stopped: {s}"),
            Stop::Undecided(_) => "saturated; the remainder is undecided".into(),
            Stop::Uncovered(_) => "saturated; a divergence no rule covers is left".into(),
        }
    }
}

/// What one run did.
#[derive(Clone, Debug)]
pub struct RunReport {
    pub stop: Stop,
    pub iterations: usize,
    pub nodes: usize,
    pub classes: usize,
    /// Rule name → number of applications, sorted by name.
    pub applied: BTreeMap<String, usize>,
}

/// Runs `rules` on `egraph` until saturation or a limit. The rules'
/// searches share one budget of `limits.matches` matching steps; the run
/// stops when it is spent, after the rule whose search spent it, without
/// applying that iteration's matches.
pub fn run_rules(
    egraph: EGraph,
    rules: &[Rewrite<Ward, Fold>],
    limits: &Limits,
) -> (EGraph, RunReport) {
    let _matching = crate::budget::Matching::enter(limits.matches);
    let runner = Runner::<Ward, Fold, ()>::new(Fold::default())
        .with_egraph(egraph)
        .with_node_limit(limits.nodes)
        .with_iter_limit(limits.iterations)
        .with_time_limit(limits.time)
        .with_scheduler(Budgeted)
        .run(rules);
    let stop = match &runner.stop_reason {
        Some(StopReason::Saturated) | None => Stop::Saturated,
        Some(StopReason::IterationLimit(n)) => Stop::IterationLimit(*n),
        Some(StopReason::NodeLimit(n)) => Stop::NodeLimit(*n),
        Some(StopReason::TimeLimit(_)) => Stop::TimeLimit,
        Some(StopReason::Other(s)) if s == MATCH_LIMIT => Stop::MatchLimit(limits.matches),
        Some(StopReason::Other(s)) => Stop::Other(s.clone()),
    };
    let mut applied = BTreeMap::new();
    for it in &runner.iterations {
        for (name, n) in &it.applied {
            *applied.entry(name.as_str().to_string()).or_insert(0) += n;
        }
    }
    let report = RunReport {
        stop,
        iterations: runner.iterations.len(),
        nodes: runner.egraph.total_number_of_nodes(),
        classes: runner.egraph.number_of_classes(),
        applied,
    };
    (runner.egraph, report)
}

/// The stop reason the scheduler gives egg when the matching budget is spent.
const MATCH_LIMIT: &str = "match limit";

/// egg's simple schedule (every rule searched on the whole e-graph each
/// iteration), stopping the run as soon as the matching budget is spent.
struct Budgeted;

impl RewriteScheduler<Ward, Fold> for Budgeted {
    fn search_rewrites<'a>(
        &mut self,
        iteration: usize,
        egraph: &EGraph,
        rewrites: &[&'a Rewrite<Ward, Fold>],
        limits: &RunnerLimits,
    ) -> RunnerResult<Vec<Vec<SearchMatches<'a, Ward>>>> {
        let mut matches = Vec::with_capacity(rewrites.len());
        for rw in rewrites {
            matches.push(rw.search(egraph));
            if crate::budget::matching_exhausted() {
                return Err(StopReason::Other(MATCH_LIMIT.into()));
            }
            limits.check_limits(iteration, egraph)?;
        }
        Ok(matches)
    }
}
