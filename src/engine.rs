//! The simplification pipeline for one expression, and the check of one
//! claim, built from the stages: normalise → e-graph with the Ward rules →
//! extract → normalise, repeated until the normal form stops changing.

use std::collections::BTreeMap;
use std::sync::Arc;

use egg::Rewrite;

use crate::context::Context;
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::egraph::{
    add_term, extract_term, run_rules, EGraph, Fold, Limits, Stop, Ward, WardCost,
};
use crate::normal::{normal_form_with, Caveats, Memo, Singular};
use crate::rules::RuleBook;
use crate::term::Term;

/// The rules and limits for simplifying the expressions of one file.
pub struct Engine {
    pub ctx: Arc<Context>,
    book: Arc<RuleBook>,
    rewrites: Vec<Rewrite<Ward, Fold>>,
    pub limits: Limits,
    /// Integrals this engine has expanded.
    memo: Memo,
}

/// The result of simplifying one expression.
#[derive(Clone, Debug)]
pub struct Simplified {
    /// Contact-term normal form.
    pub term: Term,
    /// Why the last e-graph run stopped.
    pub stop: Stop,
    /// Largest e-graph of any round, in e-nodes.
    pub nodes: usize,
    pub iterations: usize,
    pub rounds: usize,
    /// Rules applied, with counts, sorted by name.
    pub applied: BTreeMap<String, usize>,
    /// Where derivatives of explicit functions were taken only pointwise:
    /// the normal form holds away from these coincidences.
    pub caveats: Caveats,
}

/// What checking a claim found.
#[derive(Clone, Debug)]
pub enum Verdict {
    /// Both sides have the same normal form, as distributions: contact
    /// terms included.
    Proved(Simplified),
    /// Both sides agree away from the coincidences in `caveats`, where
    /// derivatives of explicit functions were taken pointwise; the
    /// remainder holds at most δ-function terms at those coincidences.
    ProvedAway(Simplified),
    /// They do not; the term is left side minus right side, simplified.
    NotProved(Simplified),
}

impl Verdict {
    /// The simplification behind the verdict.
    pub fn simplified(&self) -> &Simplified {
        match self {
            Verdict::Proved(s) | Verdict::ProvedAway(s) | Verdict::NotProved(s) => s,
        }
    }

    /// True for both kinds of proof.
    pub fn holds(&self) -> bool {
        !matches!(self, Verdict::NotProved(_))
    }

    /// True when the two sides agree with nothing left over: proved, or
    /// proved away from coincident points with no contact terms between
    /// them there.
    pub fn settles(&self) -> bool {
        match self {
            Verdict::Proved(_) => true,
            Verdict::ProvedAway(s) => s.term.is_zero(),
            Verdict::NotProved(_) => false,
        }
    }
}

impl Engine {
    pub fn new(ctx: Arc<Context>, book: Arc<RuleBook>, limits: Limits) -> Result<Engine> {
        let rewrites = book.rewrites(&ctx)?;
        Ok(Engine {
            ctx,
            book,
            rewrites,
            limits,
            memo: Memo::default(),
        })
    }

    /// Simplifies a term to contact-term normal form.
    pub fn simplify(&self, t: &Term) -> Result<Simplified> {
        let first = normal_form_with(&self.ctx, t, Some(&self.memo))?;
        let mut current = first.term;
        let mut out = Simplified {
            term: current.clone(),
            stop: Stop::Saturated,
            nodes: 0,
            iterations: 0,
            rounds: 0,
            applied: BTreeMap::new(),
            caveats: first.caveats,
        };
        let mut finished = false;
        // A simplification still changing after `limits.rounds` rounds stops
        // with `Stop::RoundLimit`: its claim is unknown, not refuted.
        for _ in 0..self.limits.rounds {
            let mut eg = if self.limits.explanations {
                EGraph::new(Fold::default()).with_explanations_enabled()
            } else {
                EGraph::new(Fold::default())
            };
            let root = add_term(&mut eg, &current);
            let (eg, report) = run_rules(eg, &self.rewrites, &self.limits);
            if let Some((a, b)) = eg.analysis.conflicts.first() {
                return Err(Error::new(
                    ErrorKind::Rule,
                    format!("the rules proved {a} = {b}: some loaded rule is unsound"),
                ));
            }
            out.rounds += 1;
            out.iterations += report.iterations;
            out.nodes = out.nodes.max(report.nodes);
            for (name, n) in report.applied {
                *out.applied.entry(name).or_insert(0) += n;
            }
            out.stop = report.stop;
            let redexes = {
                let _matching = crate::budget::Matching::enter(self.limits.matches);
                match self.book.redexes(&eg, &self.ctx) {
                    Some(redexes) => redexes,
                    None => {
                        // Extraction then prefers smaller forms only; the
                        // run is reported as stopped, so nothing is proved
                        // that the rules did not prove.
                        out.stop = Stop::MatchLimit(self.limits.matches);
                        Default::default()
                    }
                }
            };
            let extractor = egg::Extractor::new(&eg, WardCost { redexes });
            let (_, best) = extractor.find_best(eg.find(root));
            let normal = normal_form_with(
                &self.ctx,
                &extract_term(&self.ctx, &best)?,
                Some(&self.memo),
            )?;
            out.caveats.extend(normal.caveats);
            let next = normal.term;
            let done = next == current || !out.stop.is_saturated();
            current = next;
            if done {
                finished = true;
                break;
            }
        }
        if !finished {
            // Still changing: the remainder is not final.
            out.stop = Stop::RoundLimit(self.limits.rounds);
        }
        if out.stop.is_saturated() {
            let notes = uncovered(&self.ctx, &current);
            if !notes.is_empty() {
                out.stop = Stop::Uncovered(notes.join("; "));
            }
        }
        out.term = current;
        Ok(out)
    }

    /// Checks `lhs = rhs` by simplifying their difference to zero.
    pub fn check(&self, lhs: &Term, rhs: &Term) -> Result<Verdict> {
        let difference = Term::Add(vec![lhs.clone(), rhs.clone().negated()]);
        let mut s = match self.simplify(&difference) {
            Ok(s) => s,
            // An expansion past the term budget decides nothing: the claim
            // is unknown, with the difference as written and the reason.
            Err(e) if crate::budget::is_too_many_terms(&e) => {
                return Ok(unfinished(
                    difference,
                    Stop::TermLimit(crate::budget::MAX_TERMS),
                ))
            }
            // So does an index contraction that met its bound: a defect,
            // but one that must not be read as a remainder.
            Err(e) if crate::budget::is_contraction_unfinished(&e) => {
                return Ok(unfinished(
                    difference,
                    Stop::ContractionLimit(crate::normal::CONTRACTION_STEPS),
                ))
            }
            Err(e) => return Err(e),
        };
        if !s.term.is_zero() && s.stop.is_saturated() {
            if crate::normal::vanishes_identically(&self.ctx, &s.term) {
                // Zero over the common denominator: a cancellation the
                // normal form leaves written out.
                s.term = Term::zero();
            } else if let Some(why) = self.undecided(&s.term) {
                s.stop = Stop::Undecided(why);
            }
        }
        Ok(if s.term.is_zero() && s.caveats.is_empty() {
            Verdict::Proved(s)
        } else if s.term.is_zero() || (!s.caveats.is_empty() && only_at(&s.term, &s.caveats)) {
            Verdict::ProvedAway(s)
        } else {
            Verdict::NotProved(s)
        })
    }
}

impl Engine {
    /// Why a nonzero remainder does not refute its claim, when it holds ₂F₁
    /// (see [`crate::normal::hypergeometric::split`]): its family may obey
    /// relations the normal form does not decide, or no coefficient could
    /// be shown to be a nonzero function (at seeded random values of the
    /// parameters, [`crate::numeric::nonzero`]). `None`: refuted.
    fn undecided(&self, remainder: &Term) -> Option<String> {
        if !crate::normal::hypergeometric::contains_hyp2f1(remainder) {
            return None;
        }
        let coefficients = match crate::normal::hypergeometric::split(&self.ctx, remainder) {
            Ok(c) => c,
            // Several families (the four-point blocks hold ₂F₁ of z and
            // of z̄): the remainder itself, at sampled parameters.
            Err(_)
                if crate::numeric::nonzero::hypergeometric_nonzero(
                    &self.ctx,
                    remainder,
                    NONZERO_SEED,
                ) =>
            {
                return None
            }
            Err(why) => return Some(why),
        };
        let shown = coefficients.iter().any(|c| {
            crate::numeric::nonzero::somewhere_nonzero(&self.ctx, c, NONZERO_SEED) == Some(true)
        });
        (!shown).then(|| {
            "no coefficient of ₂F₁ in the remainder was shown to be a nonzero function (at sampled values of the parameters)".to_string()
        })
    }
}

/// The divergences and traces of conserved operators (T, and operators
/// declared `conserved`) left in a normal form, each as a sentence naming
/// the insertions no rule covered: `no rule covers the insertion
/// J[rho](x1) in ∂[mu](x) ⟨T[mu,nu](x) J[rho](x1) phi(x2)⟩`. Such a term
/// is a Ward identity the loaded rules do not know, so a remainder holding
/// it refutes nothing. Empty when there is none.
pub fn uncovered(ctx: &Context, t: &Term) -> Vec<String> {
    let mut found: Vec<String> = Vec::new();
    let printer = crate::term::print::Printer::new(ctx, crate::term::print::Style::Unicode);
    let mut visit = |f: &Term| {
        // A derivative chain over a correlator: its indices and points.
        let mut derivs = Vec::new();
        let mut body = f;
        while let Term::Der(i, p, inner) = body {
            derivs.push((i, p));
            body = inner;
        }
        let Term::Corr(ops) = body else { return };
        for (k, op) in ops.iter().enumerate() {
            if !ctx.is_conserved(&op.name) {
                continue;
            }
            let named = |i: &crate::term::Index| matches!(i, crate::term::Index::Named(_));
            let divergence = derivs
                .iter()
                .any(|(i, p)| p.name == op.point.name && named(i) && op.indices.contains(i));
            let trace = op.name == crate::context::STRESS_TENSOR
                && op.indices.len() == 2
                && named(&op.indices[0])
                && op.indices[0] == op.indices[1];
            if !(divergence || trace) {
                continue;
            }
            let others: Vec<String> = ops
                .iter()
                .enumerate()
                .filter(|(j, o)| *j != k && !o.indices.is_empty())
                .map(|(_, o)| printer.term(&Term::Corr(vec![o.clone()])))
                .map(|s| s.trim_start_matches('⟨').trim_end_matches('⟩').to_string())
                .collect();
            let whole = printer.term(f);
            let sentence = match others.len() {
                0 => format!("no rule covers {whole}"),
                1 => format!("no rule covers the insertion {} in {whole}", others[0]),
                _ => format!(
                    "no rule covers the insertions {} in {whole}",
                    others.join(", ")
                ),
            };
            if !found.contains(&sentence) {
                found.push(sentence);
            }
        }
    };
    walk_factors(t, &mut visit);
    found
}

/// Calls `visit` on every factor of every product in `t`, and inside
/// integrals.
fn walk_factors(t: &Term, visit: &mut dyn FnMut(&Term)) {
    match t {
        Term::Add(ts) | Term::Mul(ts) => ts.iter().for_each(|t| walk_factors(t, visit)),
        Term::Integral(i) => walk_factors(&i.body, visit),
        Term::Der(..) | Term::Corr(_) => visit(t),
        _ => {}
    }
}

/// Seed of the sampled parameters that show a coefficient is not zero.
const NONZERO_SEED: u64 = 0x05ee_d2f1;

/// The value of a parameter that makes two sides equal, when they depend
/// on it linearly and it comes out as a constant.
#[derive(Clone, Debug)]
pub struct Solved {
    /// The value, in normal form (free of points and indices).
    pub value: Term,
    /// Where the equation with this value holds only away from coincident
    /// points.
    pub caveats: Caveats,
}

impl Engine {
    /// Solves `lhs = rhs` for `unknown` exactly: with N(u) the normal form of
    /// lhs - rhs, N is affine in u when N(0) + u (N(1) - N(0)) is N(u); the
    /// value is -N(0)/(N(1) - N(0)) when that is a constant, checked by
    /// putting it back (the equation must then hold). `None` when the
    /// dependence is not linear, the ratio is not a constant, or nothing
    /// depends on the unknown.
    pub fn solve_linear(&self, unknown: &str, lhs: &Term, rhs: &Term) -> Result<Option<Solved>> {
        let with = |value: Term| {
            let put = |t: &Term| crate::term::diff::substitute(t, unknown, &value);
            Term::Add(vec![put(lhs), put(rhs).negated()])
        };
        let at_zero = self.simplify(&with(Term::zero()))?;
        let at_one = self.simplify(&with(Term::one()))?;
        let slope = self.simplify(&Term::Add(vec![
            at_one.term.clone(),
            at_zero.term.clone().negated(),
        ]))?;
        if slope.term.is_zero() {
            return Ok(None);
        }
        // The coefficients, in the parameters alone, of one monomial of the
        // slope (its factors and point-dependent atoms) in both.
        let slope_monos = crate::normal::monomials(&self.ctx, &slope.term)?;
        let offset_monos = crate::normal::monomials(&self.ctx, &at_zero.term)?;
        let Some(key) = slope_monos.first().map(point_part) else {
            return Ok(None);
        };
        let coefficient = |monos: &[crate::normal::Mono]| {
            Term::Add(
                monos
                    .iter()
                    .filter(|m| point_part(m) == key)
                    .map(parameter_part)
                    .collect(),
            )
        };
        let value = crate::normal::normalize(
            &self.ctx,
            &Term::Mul(vec![
                Term::int(-1),
                coefficient(&offset_monos),
                Term::Pow(Box::new(coefficient(&slope_monos)), Box::new(Term::int(-1))),
            ]),
        )?;
        let constant = self.ctx.points.iter().enumerate().all(|(k, p)| {
            !value.mentions_point(&crate::term::Point::named(k as u32, p.name.as_str()))
        });
        if !constant {
            return Ok(None);
        }
        match self.check(
            &crate::term::diff::substitute(lhs, unknown, &value),
            &crate::term::diff::substitute(rhs, unknown, &value),
        )? {
            Verdict::Proved(s) | Verdict::ProvedAway(s) => Ok(Some(Solved {
                value,
                caveats: s.caveats,
            })),
            Verdict::NotProved(_) => Ok(None),
        }
    }
}

/// A monomial's factors and the atoms that depend on points: what tells
/// its kind apart, whatever its coefficient in the parameters.
fn point_part(m: &crate::normal::Mono) -> (Vec<Term>, Vec<(Term, num_rational::BigRational)>) {
    (
        m.factors.clone(),
        m.atoms
            .iter()
            .filter(|(a, _)| mentions_any_point(a))
            .map(|(a, e)| (a.clone(), e.clone()))
            .collect(),
    )
}

/// The rest: the coefficient and the parameter atoms, as a term.
fn parameter_part(m: &crate::normal::Mono) -> Term {
    let mut fs = vec![Term::Num(m.coef.clone())];
    for (a, e) in &m.atoms {
        if !mentions_any_point(a) {
            fs.push(Term::Pow(
                Box::new(a.clone()),
                Box::new(Term::Num(e.clone())),
            ));
        }
    }
    Term::Mul(fs)
}

/// True if a term mentions a point anywhere.
fn mentions_any_point(t: &Term) -> bool {
    match t {
        Term::Num(_) | Term::Sym(_) => false,
        Term::Pow(a, b) => mentions_any_point(a) || mentions_any_point(b),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().any(mentions_any_point),
        _ => true,
    }
}

/// True if every term of a normal form carries a δ-function at one of the
/// coincidences (possibly differentiated): such terms vanish away from
/// them.
fn only_at(t: &Term, caveats: &Caveats) -> bool {
    let summands = match t {
        Term::Add(ts) => ts.as_slice(),
        t => std::slice::from_ref(t),
    };
    summands.iter().all(|s| {
        let factors = match s {
            Term::Mul(fs) => fs.as_slice(),
            f => std::slice::from_ref(f),
        };
        factors.iter().any(|f| {
            let mut f = f;
            while let Term::Der(_, _, body) = f {
                f = body;
            }
            let Term::DeltaFn(a, b) = f else {
                return false;
            };
            caveats.iter().any(|c| match &c.at {
                Singular::Point(p) => {
                    (a.name == c.var.name && b.name == p.name)
                        || (b.name == c.var.name && a.name == p.name)
                }
                Singular::Zeros(_) => false,
            })
        })
    })
}

/// A claim the normaliser gave up on: unknown, with the difference as
/// written and the reason.
fn unfinished(difference: Term, stop: Stop) -> Verdict {
    Verdict::NotProved(Simplified {
        term: difference,
        stop,
        nodes: 0,
        iterations: 0,
        rounds: 0,
        applied: BTreeMap::new(),
        caveats: Default::default(),
    })
}
