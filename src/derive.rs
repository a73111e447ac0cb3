//! Checking a hand derivation step by step: each step against the one
//! before it, proved by the rules (which ones applied is reported), or not,
//! with a diagnosis of the usual slips: a flipped sign, a wrong constant
//! factor (exact), or a contact term missing, extra or wrong at a named
//! insertion.

use crate::diagnostic::Result;
use crate::egraph::Stop;
use crate::engine::{Engine, Verdict};
use crate::lower::Step;
use crate::normal::normalize;
use crate::outcome::{Change, Expr, Slip, StepNumeric, TermChange};
use crate::term::{Point, Term};

/// What checking one step found.
#[derive(Clone, Debug)]
pub enum StepVerdict {
    /// Equal to the step before; the rules that fired (empty when
    /// normalisation alone sufficed), and the coincidences away from which
    /// alone it holds (empty: as distributions).
    Proved {
        rules: Vec<String>,
        away: crate::normal::Caveats,
        /// Proved with the model's explicit correlators in place of the
        /// correlators, not by the rules alone.
        in_model: bool,
        /// When proved only away from coincident points: the contact terms
        /// there in which the steps differ, if any (left to numerics).
        contact: Option<Contact>,
    },
    /// Not equal: the remainder (earlier minus this step) and what the
    /// slip is.
    Refuted { remainder: Term, slip: Slip },
    /// The search stopped on a limit before settling it.
    Unknown { remainder: Term, stop: Stop },
    /// Not proved by the rules, but both steps agree on the file's model
    /// at every sampled configuration.
    Confirmed { samples: usize },
}

/// Contact terms at coincident points in which two steps differ, which
/// the algebra leaves open.
#[derive(Clone, Debug)]
pub struct Contact {
    /// The difference, with the model's correlators in place.
    pub terms: Term,
    /// The rules' remainder and diagnosis, for the report if the contact
    /// terms turn out wrong.
    pub remainder: Term,
    pub slip: Slip,
}

/// One checked step.
#[derive(Clone, Debug)]
pub struct StepReport {
    /// The step as written (lowered).
    pub expr: Term,
    pub line: usize,
    /// What the user said justifies it (`by …`).
    pub claimed: Vec<String>,
    pub verdict: StepVerdict,
    /// What the numeric check of a step the rules did not prove found.
    pub numeric: Option<StepNumeric>,
    /// Proved away from coincident points, and the contact terms there
    /// then confirmed on the model.
    pub proved_away_first: bool,
}

/// The moves a step may cite after `by` besides rule names, each with what
/// it stands for. The rules' own names (`ward-divergence`, …) are checked
/// against what fired; these name the bookkeeping of normalisation and the
/// numeric checks, and are labels for the reader.
pub const MOVES: &[(&str, &str)] = &[
    ("algebra", "expanding, collecting and cancelling"),
    (
        "linearity",
        "splitting sums, integrals and derivatives of sums",
    ),
    ("leibniz", "the product rule"),
    ("differentiate", "derivatives of explicit functions"),
    (
        "contraction",
        "summing indices: traces, n·n = 1, δ contractions",
    ),
    ("symmetry", "symmetric T, antisymmetric parameters"),
    ("killing-equation", "∂_μ ε_ν + ∂_ν ε_μ = (2/d) δ_μν ∂·ε"),
    ("sift", "integrating a δ-function"),
    (
        "wall-delta",
        "δ(y) turning a half-space integral into one over the wall",
    ),
    (
        "divergence-theorem",
        "a surface integral as the volume integral of a divergence",
    ),
    ("parts", "integration by parts"),
    (
        "integrate",
        "integrating a total derivative, or an integral done by hand",
    ),
    (
        "model",
        "the model's correlators (proved with them in place where the algebra allows, otherwise checked numerically)",
    ),
    (
        "wick",
        "Wick contraction in the free model (checked numerically)",
    ),
    ("images", "the method of images (checked numerically)"),
    ("quadrature", "a numeric integral (checked numerically)"),
];

/// Every name after `by` must be a rule of `rules` or one of [`MOVES`]; an
/// unknown one is an error at its span, with the nearest known name.
pub fn check_citations<'a>(
    rules: impl Iterator<Item = &'a str> + Clone,
    steps: &[Step],
) -> std::result::Result<(), (String, crate::syntax::ast::Span, Option<String>)> {
    let known = |n: &str| MOVES.iter().any(|(m, _)| *m == n) || rules.clone().any(|r| r == n);
    for step in steps {
        for (name, span) in &step.cited {
            if !known(name) {
                let nearest = MOVES
                    .iter()
                    .map(|(m, _)| *m)
                    .chain(rules.clone())
                    .map(|m| (edit_distance(name, m), m))
                    .filter(|(k, m)| *k <= 2.max(m.len() / 4))
                    .min()
                    .map(|(_, m)| m.to_string());
                return Err((name.clone(), *span, nearest));
            }
        }
    }
    Ok(())
}

/// Levenshtein distance between two short names.
pub(crate) fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut prev = row[0];
        row[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let next = (prev + usize::from(ca != *cb))
                .min(row[j] + 1)
                .min(row[j + 1] + 1);
            prev = row[j + 1];
            row[j + 1] = next;
        }
    }
    row[b.len()]
}

/// Checks a step against the one before it with a model's explicit
/// correlators in place of the correlators.
pub type ModelProver<'a> = dyn Fn(&Term, &Term) -> Result<Verdict> + 'a;

/// Checks every step against the one before it: by the rules, then (for a
/// step they do not prove) with the model's correlators in place when a
/// model is given; a step neither proves is diagnosed.
pub fn check(
    engine: &Engine,
    start: &Term,
    steps: &[Step],
    model: Option<&ModelProver>,
) -> Result<Vec<StepReport>> {
    let mut out = Vec::new();
    let mut previous = start;
    for Step {
        expr: step,
        line,
        cited: claimed,
    } in steps
    {
        let rules = engine.check(previous, step)?;
        let mut verdict = rules.clone();
        let mut in_model = false;
        if let (false, Some(prove)) = (verdict.settles(), model) {
            // A model that cannot express a correlator of the step leaves
            // the verdict of the rules.
            if let Ok(v) = prove(previous, step) {
                // A model proof replaces the rules' verdict unless it is the
                // weaker of two "away" proofs.
                let better = v.settles() || !verdict.holds();
                if v.holds() && better {
                    verdict = v;
                    in_model = true;
                }
            }
        }
        let verdict = match verdict {
            Verdict::Proved(s) | Verdict::ProvedAway(s) => StepVerdict::Proved {
                rules: s.applied.keys().cloned().collect(),
                away: s.caveats,
                in_model,
                contact: if s.term.is_zero() {
                    None
                } else {
                    // What the rules make of the difference, for the report
                    // if numerics find the contact terms wrong.
                    let (remainder, slip) = match &rules {
                        Verdict::NotProved(r) => {
                            (r.term.clone(), diagnose(engine, previous, step, &r.term)?)
                        }
                        _ => (s.term.clone(), Slip::ContactTerms),
                    };
                    Some(Contact {
                        terms: s.term,
                        remainder,
                        slip,
                    })
                },
            },
            Verdict::NotProved(s) if !s.stop.is_saturated() => StepVerdict::Unknown {
                remainder: s.term.clone(),
                stop: s.stop.clone(),
            },
            Verdict::NotProved(s) => StepVerdict::Refuted {
                slip: diagnose(engine, previous, step, &s.term)?,
                remainder: s.term,
            },
        };
        out.push(StepReport {
            expr: step.clone(),
            line: *line,
            claimed: claimed.iter().map(|(n, _)| n.clone()).collect(),
            verdict,
            numeric: None,
            proved_away_first: false,
        });
        previous = step;
    }
    Ok(out)
}

/// Names the slip that turns `before` into `after`, if it is a common one.
fn diagnose(engine: &Engine, before: &Term, after: &Term, remainder: &Term) -> Result<Slip> {
    let show = |t: &Term| Expr::new(t.clone(), engine.ctx.clone());
    // A flipped sign: before = -after.
    if engine.check(before, &after.clone().negated())?.settles() {
        return Ok(Slip::Sign);
    }
    // A constant factor: before = c · after for a scalar c read off the
    // first term of each.
    let p = engine.simplify(before)?.term;
    let q = engine.simplify(after)?.term;
    if let (Some((cp, fp)), Some(q_terms)) = (split_first(&p), terms(&q)) {
        for t in q_terms {
            let (cq, fq) = coefficient(&t);
            if fq == fp && !cq.is_zero() {
                let ratio = normalize(
                    engine.ctx.as_ref(),
                    &Term::Mul(vec![
                        cp.clone(),
                        Term::Pow(Box::new(cq), Box::new(Term::int(-1))),
                    ]),
                )?;
                let scaled = Term::Mul(vec![ratio.clone(), after.clone()]);
                if engine.check(before, &scaled)?.settles() {
                    return Ok(Slip::Factor {
                        ratio: show(&ratio),
                    });
                }
            }
        }
    }
    // Contact terms: every term of the remainder sits at one insertion (a
    // point that some correlator is inserted at; the integration point of
    // the δ-functions is common to all of them and names nothing).
    let points: Vec<Vec<Point>> = terms(remainder)
        .unwrap_or_default()
        .iter()
        .map(contact_points)
        .collect();
    let shared = points.first().and_then(|first| {
        first.iter().find(|c| {
            points.iter().all(|ps| ps.iter().any(|p| p.name == c.name))
                && (inserted_at(&p, &c.name) || inserted_at(&q, &c.name))
        })
    });
    if let Some(at) = shared {
        let change = match (has_contact(&p, at), has_contact(&q, at)) {
            (true, false) => Change::Missing,
            (false, true) => Change::Extra,
            _ => Change::Coefficient,
        };
        return Ok(Slip::Contact {
            at: at.name.to_string(),
            change,
        });
    }
    if let Some(slip) = term_slip(engine, &p, &q, remainder)? {
        return Ok(slip);
    }
    Ok(Slip::Remainder)
}

/// When the steps differ in one term only: that term is missing, extra, or
/// carries a different coefficient (both printed exactly).
fn term_slip(engine: &Engine, p: &Term, q: &Term, remainder: &Term) -> Result<Option<Slip>> {
    let show = |t: &Term| Expr::new(t.clone(), engine.ctx.clone());
    let (Some(r), Some(p_terms), Some(q_terms)) = (terms(remainder), terms(p), terms(q)) else {
        return Ok(None);
    };
    let [only] = r.as_slice() else {
        return Ok(None);
    };
    let (_, factors) = coefficient(only);
    let find = |ts: &[Term]| ts.iter().map(coefficient).find(|(_, f)| *f == factors);
    let term = match factors.as_slice() {
        [] => None,
        [f] => Some(show(f)),
        fs => Some(show(&Term::Mul(fs.to_vec()))),
    };
    let change = match (find(&p_terms), find(&q_terms)) {
        (Some(_), None) => TermChange::Missing,
        (None, Some(_)) => TermChange::Extra,
        (Some((cp, _)), Some((cq, _))) => TermChange::Coefficient {
            before: show(&normalize(engine.ctx.as_ref(), &cp)?),
            after: show(&normalize(engine.ctx.as_ref(), &cq)?),
        },
        (None, None) => return Ok(None),
    };
    Ok(Some(Slip::Term { term, change }))
}

/// The summands of a normal form (none for 0).
fn terms(t: &Term) -> Option<Vec<Term>> {
    match t {
        t if t.is_zero() => Some(vec![]),
        Term::Add(ts) => Some(ts.clone()),
        t => Some(vec![t.clone()]),
    }
}

fn split_first(t: &Term) -> Option<(Term, Vec<Term>)> {
    terms(t)?.first().map(coefficient)
}

/// A normal-form product split into its scalar coefficient and the rest.
fn coefficient(t: &Term) -> (Term, Vec<Term>) {
    let factors = match t {
        Term::Mul(fs) => fs.clone(),
        other => vec![other.clone()],
    };
    let (scalar, rest): (Vec<Term>, Vec<Term>) = factors.into_iter().partition(|f| {
        matches!(
            f,
            Term::Num(_) | Term::Sym(_) | Term::Pow(..) | Term::Add(_) | Term::Mul(_)
        )
    });
    let c = match scalar.len() {
        0 => Term::one(),
        1 => scalar.into_iter().next().unwrap_or_else(Term::one),
        _ => Term::Mul(scalar),
    };
    (c, rest)
}

/// The points p of the δ(x - p) factors of a term.
fn contact_points(t: &Term) -> Vec<Point> {
    let mut out = Vec::new();
    let factors = match t {
        Term::Mul(fs) => fs.clone(),
        other => vec![other.clone()],
    };
    for f in factors {
        if let Term::DeltaFn(a, b) = f {
            out.push(a);
            out.push(b);
        }
    }
    out
}

/// True if some correlator in `t` has an insertion at the point `name`.
fn inserted_at(t: &Term, name: &str) -> bool {
    match t {
        Term::Corr(ops) => ops.iter().any(|o| &*o.point.name == name),
        Term::Add(ts) | Term::Mul(ts) => ts.iter().any(|t| inserted_at(t, name)),
        Term::Pow(a, b) => inserted_at(a, name) || inserted_at(b, name),
        Term::Der(_, _, body) => inserted_at(body, name),
        Term::Integral(i) => inserted_at(&i.body, name),
        _ => false,
    }
}

fn has_contact(t: &Term, p: &Point) -> bool {
    terms(t)
        .unwrap_or_default()
        .iter()
        .any(|s| contact_points(s).iter().any(|q| q.name == p.name))
}
