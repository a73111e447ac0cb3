//! Ward rules as data: loading `.rules` files, and running their rules as
//! egg rewrites through one generic searcher/applier.
//!
//! No Ward identity is written in Rust: the shipped ones live in `rules/`
//! at the top of the repository and are embedded in the binary, and a user
//! adds more with `--rules FILE` or a `rules "FILE"` statement.

mod apply;
mod matcher;
mod pattern;

use std::collections::HashSet;
use std::ops::ControlFlow;
use std::sync::Arc;

use egg::{Applier, Id, Rewrite, SearchMatches, Searcher, Subst, Symbol, Var};

use crate::context::Context;
use crate::diagnostic::{Error, ErrorKind, Result, Source};
use crate::egraph::{EGraph, Fold, Ward};
use crate::syntax;
pub use matcher::Binding;
pub use pattern::{Cond, Pat};

/// The rule files that ship with wardsmith, by file name.
pub const SHIPPED: &[(&str, &str)] = &[
    (
        "stress-tensor.rules",
        include_str!("../../rules/stress-tensor.rules"),
    ),
    (
        "halfspace.rules",
        include_str!("../../rules/halfspace.rules"),
    ),
];

/// How the source names of shipped rule files begin.
const SHIPPED_PREFIX: &str = "<shipped>";

/// One rule, lowered.
#[derive(Debug)]
pub struct Rule {
    pub name: String,
    pub ruleset: String,
    pub from: Pat,
    pub to: Pat,
    pub conditions: Vec<Cond>,
    /// Where it was written: file name and line.
    pub origin: String,
    vars: Vec<String>,
    splices: Vec<String>,
}

impl Rule {
    /// True for a rule from one correlator to one correlator with as many
    /// insertions and the same sequence: a symmetry, no reduction.
    fn is_renaming(&self) -> bool {
        match (&self.from, &self.to) {
            (
                Pat::Corr {
                    items: a,
                    splice: s,
                },
                Pat::Corr {
                    items: b,
                    splice: t,
                },
            ) => a.len() == b.len() && s == t,
            _ => false,
        }
    }
}

/// All rules in force for one run.
#[derive(Debug, Default)]
pub struct RuleBook {
    pub rules: Vec<Arc<Rule>>,
}

impl RuleBook {
    /// The shipped rules.
    pub fn shipped() -> Result<RuleBook> {
        let mut book = RuleBook::default();
        for (name, text) in SHIPPED {
            book.load(&Source::new(
                format!("{SHIPPED_PREFIX}/rules/{name}"),
                *text,
            ))?;
        }
        Ok(book)
    }

    /// Adds the rules of one `.rules` text. Rule names must be unique. A
    /// user file that declares a `ruleset` with the name of a shipped one
    /// replaces that shipped set whole, so a convention can be changed and
    /// every saved derivation rerun against it.
    pub fn load(&mut self, source: &Arc<Source>) -> Result<()> {
        let file = syntax::parse_rule_file(source)?;
        let user = !source.name.starts_with(SHIPPED_PREFIX);
        for set in &file.sets {
            if user {
                self.rules.retain(|r| {
                    !(r.ruleset == set.name.text && r.origin.starts_with(SHIPPED_PREFIX))
                });
            }
            for rule in &set.rules {
                if self.rules.iter().any(|r| r.name == rule.name.text) {
                    return Err(Error::at(
                        ErrorKind::Rule,
                        source,
                        rule.name.span,
                        format!("a rule named `{}` is already loaded", rule.name.text),
                    )
                    .with_label("duplicate rule name"));
                }
                let (from, to, conditions) = pattern::lower_rule(source, rule)?;
                let mut bound = pattern::Bound::default();
                pattern::collect_bound(&from, &mut bound);
                let line = source.line(rule.span.start);
                self.rules.push(Arc::new(Rule {
                    name: rule.name.text.clone(),
                    ruleset: set.name.text.clone(),
                    from,
                    to,
                    conditions,
                    origin: format!("{}:{}", source.name, line),
                    vars: bound.vars.into_iter().collect(),
                    splices: bound.splices.into_iter().collect(),
                }));
            }
        }
        Ok(())
    }

    /// Rules whose global conditions hold for this file, as egg rewrites.
    pub fn rewrites(&self, ctx: &Arc<Context>) -> Result<Vec<Rewrite<Ward, Fold>>> {
        let mut out = Vec::new();
        for rule in self.enabled(ctx) {
            let r = WardRule {
                rule: rule.clone(),
                ctx: ctx.clone(),
            };
            out.push(
                Rewrite::new(rule.name.as_str(), r.clone(), r)
                    .map_err(|e| Error::new(ErrorKind::Rule, e))?,
            );
        }
        Ok(out)
    }

    fn enabled<'a>(&'a self, ctx: &'a Context) -> impl Iterator<Item = &'a Arc<Rule>> + 'a {
        self.rules.iter().filter(move |r| {
            r.conditions.iter().all(|c| match c {
                Cond::Halfspace => ctx.has_halfspace(),
                Cond::NoHalfspace => !ctx.has_halfspace(),
                _ => true,
            })
        })
    }

    /// E-nodes that a rule's left side matches: unapplied redexes, which
    /// extraction avoids. Each node's search stops at its first match.
    /// `None` when the matching budget of the running
    /// [`budget::Matching`](crate::budget::Matching) span ran out first.
    pub fn redexes(&self, eg: &EGraph, ctx: &Context) -> Option<HashSet<Ward>> {
        let mut out = HashSet::new();
        // A rule that rewrites a correlator into the same correlator with
        // its indices renamed (`ward-symmetry`) reduces nothing: counted,
        // it would make every correlator with T a redex, and extraction
        // would keep ∂⟨T T …⟩ rather than the contact terms, which hold
        // several correlators with the second T.
        for rule in self.enabled(ctx).filter(|r| !r.is_renaming()) {
            for class in eg.classes() {
                for node in &class.nodes {
                    let mut matched = false;
                    let _ = matcher::match_node(
                        eg,
                        &rule.from,
                        node,
                        &mut Binding::default(),
                        &mut |b| {
                            if rule
                                .conditions
                                .iter()
                                .all(|c| matcher::holds(eg, ctx, c, b))
                            {
                                matched = true;
                                ControlFlow::Break(())
                            } else {
                                ControlFlow::Continue(())
                            }
                        },
                    );
                    if crate::budget::matching_exhausted() {
                        return None;
                    }
                    if matched {
                        out.insert(node.clone());
                    }
                }
            }
        }
        Some(out)
    }
}

/// One rule as an egg searcher and applier.
#[derive(Clone)]
struct WardRule {
    rule: Arc<Rule>,
    ctx: Arc<Context>,
}

impl Searcher<Ward, Fold> for WardRule {
    /// Searches class after class until `limit` matches are found or the
    /// matching budget runs out (the scheduler of `egraph::run_rules` then
    /// stops the run with its reason).
    fn search_with_limit(&self, eg: &EGraph, limit: usize) -> Vec<SearchMatches<'_, Ward>> {
        let mut out = Vec::new();
        let mut left = limit;
        for class in eg.classes() {
            if left == 0 || crate::budget::matching_exhausted() {
                break;
            }
            if let Some(m) = self.search_eclass_with_limit(eg, class.id, left) {
                left -= m.substs.len().min(left);
                out.push(m);
            }
        }
        out
    }

    fn search_eclass_with_limit(
        &self,
        eg: &EGraph,
        eclass: Id,
        limit: usize,
    ) -> Option<SearchMatches<'_, Ward>> {
        let mut substs: Vec<Subst> = Vec::new();
        if limit > 0 {
            let _ = matcher::match_class(
                eg,
                &self.rule.from,
                eclass,
                &mut Binding::default(),
                &mut |b| {
                    if self
                        .rule
                        .conditions
                        .iter()
                        .all(|c| matcher::holds(eg, &self.ctx, c, b))
                    {
                        substs.push(b.to_subst());
                        if substs.len() >= limit {
                            return ControlFlow::Break(());
                        }
                    }
                    ControlFlow::Continue(())
                },
            );
        }
        if substs.is_empty() {
            None
        } else {
            Some(SearchMatches {
                eclass,
                substs,
                ast: None,
            })
        }
    }

    fn vars(&self) -> Vec<Var> {
        Vec::new()
    }
}

impl Applier<Ward, Fold> for WardRule {
    fn apply_one(
        &self,
        eg: &mut EGraph,
        eclass: Id,
        subst: &Subst,
        _searcher_ast: Option<&egg::PatternAst<Ward>>,
        rule_name: Symbol,
    ) -> Vec<Id> {
        let b = Binding::from_subst(subst, &self.rule.vars, &self.rule.splices);
        let Some(new) = apply::instantiate(eg, &self.ctx, &self.rule.to, &b) else {
            return Vec::new();
        };
        if eg.union_trusted(eclass, new, rule_name) {
            vec![eclass]
        } else {
            Vec::new()
        }
    }
}
