//! Running rules on an e-graph with explicit limits, and reporting why the
//! run stopped.
//!
//! A run that stops on a limit is never a silent partial proof: the
//! [`Stop`] goes into every report, and anything but `Saturated` makes an
//! unproved claim "unknown" rather than false.

use std::collections::BTreeMap;
use std::time::Duration;

use egg::{Rewrite, Runner, SimpleScheduler, StopReason};

use super::{EGraph, Fold, Ward};

/// Limits for one e-graph run.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Limits {
    pub nodes: usize,
    pub iterations: usize,
    /// A safety net only; tests never depend on it.
    pub time: Duration,
    /// Record explanations (named rules) for proofs.
    pub explanations: bool,
}

impl Default for Limits {
    fn default() -> Limits {
        Limits {
            nodes: 100_000,
            iterations: 40,
            time: Duration::from_secs(60),
            explanations: false,
        }
    }
}

/// Why a run stopped.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Stop {
    /// No rule can add anything new.
    Saturated,
    IterationLimit(usize),
    NodeLimit(usize),
    TimeLimit,
    Other(String),
}

impl Stop {
    pub fn is_saturated(&self) -> bool {
        *self == Stop::Saturated
    }

    pub fn describe(&self) -> String {
        match self {
            Stop::Saturated => "saturated".into(),
            Stop::IterationLimit(n) => format!("stopped at the iteration limit ({n})"),
            Stop::NodeLimit(n) => format!("stopped at the e-node limit ({n})"),
            Stop::TimeLimit => "stopped at the time limit".into(),
            Stop::Other(s) => format!("stopped: {s}"),
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

/// Runs `rules` on `egraph` until saturation or a limit.
pub fn run_rules(
    egraph: EGraph,
    rules: &[Rewrite<Ward, Fold>],
    limits: &Limits,
) -> (EGraph, RunReport) {
    let runner = Runner::<Ward, Fold, ()>::new(Fold::default())
        .with_egraph(egraph)
        .with_node_limit(limits.nodes)
        .with_iter_limit(limits.iterations)
        .with_time_limit(limits.time)
        .with_scheduler(SimpleScheduler)
        .run(rules);
    let stop = match &runner.stop_reason {
        Some(StopReason::Saturated) | None => Stop::Saturated,
        Some(StopReason::IterationLimit(n)) => Stop::IterationLimit(*n),
        Some(StopReason::NodeLimit(n)) => Stop::NodeLimit(*n),
        Some(StopReason::TimeLimit(_)) => Stop::TimeLimit,
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
