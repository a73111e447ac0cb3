//! Running one `.ward` file end to end: read it, load its rules, lower it,
//! simplify or check every statement, and build the report and exit code.
//!
//! Everything the command line does lives here, so tests drive exactly what
//! a user runs.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use crate::diagnostic::{Error, ErrorKind, Result, Source};
use crate::egraph::Limits;
use crate::engine::Engine;
use crate::lower::{self, ItemKind, Program};
use crate::numeric::agreement::Agreement;
use crate::numeric::session::Session;
use crate::report::Reporter;
use crate::rules::RuleBook;
use crate::syntax;
use crate::syntax::ast::Span;
use crate::term::print::Style;

/// What to do with the statements of a file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mode {
    /// Print every `simplify` statement's normal form.
    Simplify,
    /// Prove every `claim` and every `simplify … expect …`.
    Check,
}

/// Settings from the command line.
#[derive(Clone, Debug, Default)]
pub struct Options {
    /// Extra rule files, beside the shipped ones and the file's own.
    pub rules: Vec<PathBuf>,
    pub style: Style,
    pub limits: Limits,
    /// Show a progress line on standard error during long numeric work.
    pub progress: bool,
    /// Report as one JSON document instead of text.
    pub json: bool,
    /// `test --accept`: rewrite the expected results that do not hold.
    pub accept: bool,
    /// Leave the files of `scan … into` as they are: `test` computes the
    /// tables but writes them only under `--write-scans`.
    pub keep_scan_files: bool,
    /// Threads for independent work: the files of `test`, the steps of a
    /// `scan`, the configurations of `sample` (0 and 1 run serially). The
    /// output is the same with any number.
    pub jobs: usize,
}

/// The printed report and the exit code (0: all claims hold, 1: some do not).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Outcome {
    pub report: String,
    pub code: i32,
    /// Under `accept`: each failing expected result's place in the source
    /// and the normal form to write there instead.
    pub edits: Vec<(Span, String)>,
}

/// What one numeric statement gives on one configuration, before it is
/// reported (configurations may run on several threads; reports are
/// written in order).
enum Numeric {
    Evaluated(crate::numeric::session::Evaluation),
    Solved(
        crate::numeric::session::Solution,
        Option<crate::engine::Solved>,
    ),
    Flux(crate::numeric::session::FluxReport),
    Compared(
        crate::numeric::session::Evaluation,
        crate::numeric::session::Evaluation,
    ),
    Nothing,
}

/// Runs one numeric statement on the session's current sample.
fn numeric_item(s: &Session, kind: &ItemKind) -> Result<Numeric> {
    Ok(match kind {
        ItemKind::Evaluate { expr, free } => Numeric::Evaluated(s.evaluate(expr, free)?),
        ItemKind::Solve {
            unknown,
            lhs,
            rhs,
            free,
        } => {
            let solution = s.solve(unknown, lhs, rhs, free)?;
            // The exact value too, when the algebra settles it.
            let exact = s.solve_exact(unknown, lhs, rhs).ok().flatten();
            Numeric::Solved(solution, exact)
        }
        ItemKind::Flux {
            index,
            var,
            body,
            rhs,
            radius,
            free,
        } => Numeric::Flux(s.flux(index, var, body, rhs, radius, free)?),
        ItemKind::Compare { lhs, rhs, free } => {
            let left = s.evaluate(lhs, free)?;
            let right = s.evaluate(rhs, free)?;
            Numeric::Compared(left, right)
        }
        _ => Numeric::Nothing,
    })
}

/// Reports what [`numeric_item`] gave; `Some(verdict)` for statements that
/// check something.
fn numeric_report(
    result: &Numeric,
    kind: &ItemKind,
    line: usize,
    text: &str,
    reporter: &mut Reporter,
) -> Option<Agreement> {
    let input = |keyword: &str| text.strip_prefix(keyword).unwrap_or(text).to_string();
    match (result, kind) {
        (Numeric::Evaluated(values), _) => reporter
            .evaluated(line, &input("evaluate "), values)
            .map(Agreement::Unknown),
        (Numeric::Solved(solution, exact), ItemKind::Solve { unknown, .. }) => {
            reporter.solved(line, &input("solve "), unknown, solution, exact.as_ref());
            None
        }
        (Numeric::Flux(report), _) => Some(reporter.flux(line, &input("flux "), report)),
        (Numeric::Compared(left, right), _) => {
            Some(reporter.compared(line, &input("compare "), left, right))
        }
        _ => None,
    }
}

/// Evaluates a step the rules did not prove against the one before it at
/// every sampled configuration: confirmed when they agree at all of them;
/// otherwise the first configuration where they differ (the points the
/// steps mention, both values), and, when the two differ by the same
/// factor everywhere, that factor (a fraction when one with a small
/// denominator matches to 1e-9).
#[allow(clippy::too_many_arguments)]
fn numeric_step(
    s: &Session,
    ctx: &crate::context::Context,
    before: &crate::term::Term,
    after: &crate::term::Term,
    free: &[String],
    jobs: usize,
    step: &mut crate::derive::StepReport,
) {
    let samples = s.sample_count();
    let mut first_difference: Option<String> = None;
    let mut ratios: Vec<f64> = Vec::new();
    // Every configuration on its own copy of the session (in parallel),
    // then read in order, as a serial loop would.
    let configurations: Vec<usize> = (0..samples).collect();
    let values = crate::jobs::map_ordered(
        jobs,
        &configurations,
        true,
        |_, &k| {
            let view = s.on_sample(k);
            let points = view.select(k);
            match (view.evaluate(before, free), view.evaluate(after, free)) {
                (Ok(l), Ok(r)) => Ok((points, l, r)),
                (Err(e), _) | (_, Err(e)) => Err(e),
            }
        },
        &mut |_, _| {},
    );
    // The statements after this one see the last configuration.
    s.select(samples.saturating_sub(1));
    for (k, value) in values.into_iter().enumerate() {
        let (points, left, right) = match value {
            Ok(v) => v,
            Err(e) => {
                s.select(k);
                // A distribution: a divergence against its contact terms is
                // checked by flux instead.
                if flux_step(s, ctx, before, after, free, step) {
                    return;
                }
                let why = e.message.lines().next().unwrap_or("").to_string();
                step.numeric = Some(format!("not evaluated on the model: {why}"));
                return;
            }
        };
        for ((_, l), (_, r)) in left.components.iter().zip(&right.components) {
            if l.value != 0.0 && r.value != 0.0 {
                ratios.push(l.value / r.value);
            }
        }
        match crate::report::agreement(&left, &right) {
            Agreement::Agree => continue,
            Agreement::Unknown(why) => {
                step.numeric = Some(format!(
                    "not decided on the model at configuration {}: {why}",
                    k + 1
                ));
                return;
            }
            Agreement::Disagree if first_difference.is_some() => continue,
            Agreement::Disagree => {}
        }
        let at = points
            .iter()
            .filter(|(p, _)| {
                let point = crate::term::Point::named(0, p.as_str());
                before.mentions_point(&point) || after.mentions_point(&point)
            })
            .map(|(p, c)| {
                let c: Vec<String> = c.iter().map(|v| format!("{v:.4}")).collect();
                format!("{p} = ({})", c.join(", "))
            })
            .collect::<Vec<_>>()
            .join(", ");
        let pair = left
            .components
            .iter()
            .zip(&right.components)
            .find(|((_, l), (_, r))| l.value != r.value)
            .map(|((_, l), (_, r))| (l.value, r.value));
        if let Some((l, r)) = pair {
            first_difference = Some(format!(
                "they differ at {at}: {l:.9e} in the step before, {r:.9e} in this step"
            ));
        }
    }
    match first_difference {
        None => step.verdict = crate::derive::StepVerdict::Confirmed { samples },
        Some(mut note) => {
            if let Some(r) = common_ratio(&ratios) {
                let exact = small_fraction(r)
                    .map(|(p, q)| {
                        if q == 1 {
                            format!(" = {p}")
                        } else {
                            format!(" = {p}/{q}")
                        }
                    })
                    .unwrap_or_default();
                note.push_str(&format!(
                    "; at every configuration the step before is {r:.9}{exact} times this one"
                ));
            }
            step.numeric = Some(note);
        }
    }
}

/// A step between a divergence ∂_μ(x) F and terms with δ-functions at x,
/// checked as `flux` checks a local identity (docs/conventions.md §8): at every
/// configuration the flux of F through a small sphere around each
/// insertion against the contact terms there, and conservation away from
/// them. The sphere's radius is a third of the smallest distance between
/// the points (and half the height of the lowest one above a wall).
/// Returns false when the step does not have that shape.
fn flux_step(
    s: &Session,
    ctx: &crate::context::Context,
    before: &crate::term::Term,
    after: &crate::term::Term,
    free: &[String],
    step: &mut crate::derive::StepReport,
) -> bool {
    use crate::term::Term;
    let (index, var, body, rhs) = match (before, after) {
        (Term::Der(i, v, b), rhs) | (rhs, Term::Der(i, v, b)) => (i, v, b.as_ref(), rhs),
        _ => return false,
    };
    let samples = s.sample_count();
    for k in 0..samples {
        let points: Vec<(String, Vec<f64>)> = s
            .select(k)
            .into_iter()
            .filter(|(p, _)| *p != *var.name)
            .collect();
        let mut smallest = f64::INFINITY;
        for (i, (_, a)) in points.iter().enumerate() {
            for (_, b) in &points[i + 1..] {
                let d = a.iter().zip(b).map(|(x, y)| (x - y) * (x - y)).sum::<f64>();
                smallest = smallest.min(d.sqrt() / 3.0);
            }
            if ctx.has_halfspace() && a.last().is_some_and(|y| *y > 0.0) {
                smallest = smallest.min(a.last().copied().unwrap_or(0.0) / 2.0);
            }
        }
        if !smallest.is_finite() || smallest <= 0.0 {
            return false;
        }
        let thousandths = (smallest * 1000.0).floor().max(1.0) as i64;
        let radius = Term::Num(num_rational::BigRational::new(
            thousandths.into(),
            1000.into(),
        ));
        let report = match s.flux(index, var, body, rhs, &radius, free) {
            Ok(r) => r,
            Err(e) => {
                let why = e.message.lines().next().unwrap_or("").to_string();
                step.numeric = Some(format!("not checked by flux on the model: {why}"));
                return true;
            }
        };
        for check in &report.around {
            let verdict = crate::report::agreement(&check.flux, &check.contact);
            if let Agreement::Unknown(why) = verdict {
                step.numeric = Some(format!(
                    "not checked by flux on the model: around {} at configuration {}, {why}",
                    check.point,
                    k + 1
                ));
                return true;
            }
            if !verdict.agrees() {
                let pair = check
                    .flux
                    .components
                    .iter()
                    .zip(&check.contact.components)
                    .find(|((_, f), (_, c))| f.value != c.value)
                    .map(|((_, f), (_, c))| {
                        format!(": flux {:.9e}, contact terms {:.9e}", f.value, c.value)
                    })
                    .unwrap_or_default();
                step.numeric = Some(format!(
                    "by flux at configuration {}: around {} the flux through the sphere of radius {} \
                     differs from the contact terms there{pair}",
                    k + 1,
                    check.point,
                    thousandths as f64 / 1000.0
                ));
                return true;
            }
        }
        for c in &report.away {
            match crate::numeric::agreement::vanishes(&c.largest, c.scale) {
                Agreement::Agree => {}
                Agreement::Unknown(why) => {
                    step.numeric = Some(format!(
                        "not checked by flux on the model at configuration {}: {why}",
                        k + 1
                    ));
                    return true;
                }
                Agreement::Disagree => {
                    step.numeric = Some(format!(
                        "by flux at configuration {}: the divergence is {:.3e} away from the insertions, \
                         not 0",
                        k + 1,
                        c.largest.value
                    ));
                    return true;
                }
            }
        }
    }
    step.verdict = crate::derive::StepVerdict::Confirmed { samples };
    step.numeric = Some(
        "by flux: around each insertion the flux equals the contact terms, and away from them the \
         divergence vanishes"
            .into(),
    );
    true
}

/// The one ratio all values share (to 1e-9, relative), if there are at
/// least two values and it is not 1.
fn common_ratio(ratios: &[f64]) -> Option<f64> {
    let first = *ratios.first()?;
    let same = ratios
        .iter()
        .all(|r| (r - first).abs() <= 1e-9 * first.abs().max(1.0));
    (ratios.len() >= 2 && same && (first - 1.0).abs() > 1e-9).then_some(first)
}

/// p/q with q ≤ 1000 within 1e-9 (relative) of x, by continued fractions.
pub(crate) fn small_fraction(x: f64) -> Option<(i64, i64)> {
    if !x.is_finite() || x.abs() > 1e6 {
        return None;
    }
    let (mut p0, mut q0, mut p1, mut q1) = (0i64, 1i64, 1i64, 0i64);
    let mut rest = x;
    for _ in 0..20 {
        let a = rest.floor();
        if a.abs() > 1e9 {
            return None;
        }
        let a = a as i64;
        let (p2, q2) = (
            a.checked_mul(p1)?.checked_add(p0)?,
            a.checked_mul(q1)?.checked_add(q0)?,
        );
        if q2 > 1000 {
            return None;
        }
        if ((p2 as f64 / q2 as f64) - x).abs() <= 1e-9 * x.abs().max(1e-300) {
            return Some((p2, q2));
        }
        (p0, q0, p1, q1) = (p1, q1, p2, q2);
        let frac = rest - a as f64;
        if frac.abs() < 1e-15 {
            return None;
        }
        rest = 1.0 / frac;
    }
    None
}

/// Writes `stem.csv` and `stem.svg` inside the file's folder, both or
/// neither (see [`crate::files::replace_together`]).
fn write_scan(
    scan: &crate::numeric::session::Scan,
    base: &Path,
    stem: &str,
    labels: &crate::plot::Labels,
) -> Result<String> {
    let refuse = |why: String| Error::new(ErrorKind::Io, format!("cannot write the scan: {why}"));
    let csv = crate::files::output_path(base, stem, "csv").map_err(refuse)?;
    let svg = crate::files::output_path(base, stem, "svg").map_err(refuse)?;
    let plot = crate::plot::svg(scan, labels).map_err(refuse)?;
    crate::files::replace_together(&[(csv.clone(), crate::plot::csv(scan)), (svg.clone(), plot)])
        .map_err(|e| {
        Error::new(
            ErrorKind::Io,
            format!(
                "cannot write `{}` and `{}`: {e}; neither was changed",
                csv.display(),
                svg.display()
            ),
        )
    })?;
    Ok(format!("{}, {}", csv.display(), svg.display()))
}

/// The file's numeric session, built (and announced) on first use.
fn numeric_session<'s, 'a>(
    session: &'s mut Option<Session<'a>>,
    program: &'a Program,
    engine: &'a Engine,
    reporter: &mut Reporter,
) -> Result<&'s Session<'a>> {
    if session.is_none() {
        let s = Session::new(&program.ctx, engine, &program.numeric)?;
        reporter.model(&s.describe());
        *session = Some(s);
    }
    session
        .as_ref()
        .ok_or_else(|| Error::new(ErrorKind::Numeric, "no numeric session"))
}

/// Checks every `.ward` file below `dir` (sorted by path): one line per
/// file, then `N passed, M failed`. A file passes when all its claims hold;
/// an input error fails it with the diagnostic's first line, and makes the
/// exit code 2 (as `check` would), not 1. Files run on up to `opts.jobs`
/// threads; the lines come in path order all the same.
pub fn run_folder(dir: &Path, opts: &Options) -> Result<Outcome> {
    let files = crate::files::ward_files(dir)?;
    let parallel = opts.jobs > 1 && files.len() > 1;
    // Several files at once would interleave their progress lines: the
    // folder counts files instead.
    let each = Options {
        progress: opts.progress && !parallel,
        ..opts.clone()
    };
    let mut progress = |done: usize, total: usize| {
        if opts.progress && parallel {
            eprint!("\rtest: {done}/{total} files");
            if done == total {
                eprintln!();
            }
        }
    };
    let lines = crate::jobs::map_ordered(
        opts.jobs,
        &files,
        false,
        |_, path| {
            let checked =
                run_path(path, Mode::Check, &each).and_then(|out| accept(dir, path, out, &each));
            Ok::<_, std::convert::Infallible>(match checked {
                Ok(out) => {
                    let summary = out.report.lines().last().unwrap_or("").to_string();
                    if out.code == 0 {
                        (
                            true,
                            false,
                            format!("pass  {}  ({summary})", path.display()),
                        )
                    } else {
                        (
                            false,
                            false,
                            format!("FAIL  {}  ({summary})", path.display()),
                        )
                    }
                }
                Err(e) => (false, true, format!("FAIL  {}  ({})", path.display(), e)),
            })
        },
        &mut progress,
    );
    let (mut passed, mut failed, mut wrong_input) = (0, 0, false);
    let mut report = String::new();
    for (ok, input_error, line) in lines.into_iter().flatten() {
        wrong_input |= input_error;
        if ok {
            passed += 1;
        } else {
            failed += 1;
        }
        report.push_str(&line);
        report.push('\n');
    }
    report.push_str(&format!("{passed} passed, {failed} failed\n"));
    Ok(Outcome {
        report,
        code: if wrong_input {
            2
        } else {
            i32::from(failed > 0)
        },
        edits: Vec::new(),
    })
}

/// Under `--accept`, runs the file with its new expected results and writes
/// them in place (all other bytes kept, through an exclusive temporary file
/// with the file's permissions, synced, and a rename; a link is followed to
/// its file only inside `root`); otherwise, and when nothing changes,
/// returns `out` as it is.
fn accept(root: &Path, path: &Path, out: Outcome, opts: &Options) -> Result<Outcome> {
    if !opts.accept || out.edits.is_empty() {
        return Ok(out);
    }
    let io = |e: String| {
        Error::new(
            ErrorKind::Io,
            format!("cannot rewrite `{}`: {e}", path.display()),
        )
    };
    let real = crate::files::real_file_inside(root, path).map_err(io)?;
    let mut text = crate::files::read_text(&real)?.text.clone();
    let mut edits = out.edits;
    edits.sort_by_key(|(span, _)| std::cmp::Reverse(span.start));
    for (span, new) in &edits {
        if span.end > text.len()
            || !text.is_char_boundary(span.start)
            || !text.is_char_boundary(span.end)
        {
            return Err(Error::new(
                ErrorKind::Io,
                format!(
                    "`{}` changed while it was checked; nothing written",
                    path.display()
                ),
            ));
        }
        text.replace_range(span.start..span.end, new);
    }
    // The new text is run before it is written: a file that would no longer
    // read is left as it was.
    let source = Source::new(path.display().to_string(), text.clone());
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let once = Options {
        accept: false,
        ..opts.clone()
    };
    let mut again = run_source(&source, &base, Mode::Check, &once)?;
    crate::files::replace_together(&[(real, text)]).map_err(|e| io(e.to_string()))?;
    // The file's summary line names what was rewritten.
    again.report = format!(
        "{}; accepted {} new expected result(s)\n",
        again.report.trim_end_matches('\n'),
        edits.len()
    );
    Ok(again)
}

/// Reads a file from disk and runs it.
pub fn run_path(path: &Path, mode: Mode, opts: &Options) -> Result<Outcome> {
    let source = read_source(path)?;
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    run_source(&source, &base, mode, opts)
}

/// Runs a file's text; `base` is the folder its `rules "…"` paths are
/// relative to. The work runs on a thread with a large stack (see
/// [`crate::budget::MAX_DEPTH`]).
pub fn run_source(
    source: &Arc<Source>,
    base: &Path,
    mode: Mode,
    opts: &Options,
) -> Result<Outcome> {
    crate::budget::on_checker_stack(|| check_source(source, base, mode, opts))
}

fn check_source(source: &Arc<Source>, base: &Path, mode: Mode, opts: &Options) -> Result<Outcome> {
    let program = lower::lower(source, &syntax::parse_file(source)?)?;
    let book = load_rules(&program, base, opts)?;
    check_citations(source, &program, &book)?;
    if program.items.is_empty() && !opts.json {
        // Declarations alone are valid, but silence would read as a pass.
        return Ok(Outcome {
            report: "nothing to check: no statement to simplify, prove or evaluate\n".into(),
            code: 0,
            edits: Vec::new(),
        });
    }
    let engine = Engine::new(program.ctx.clone(), Arc::new(book), opts.limits)?;
    let mut reporter = if opts.json {
        Reporter::json(&program.ctx)
    } else {
        Reporter::new(&program.ctx, opts.style)
    };
    // Built on the first numeric statement, so files without one need no model.
    let mut session: Option<Session> = None;
    let (mut proved, mut away, mut confirmed, mut failed) = (0, 0, 0, 0);
    // Statements marked `slip` that were refuted, as marked.
    let mut caught = 0;
    // Numeric statements that could not be decided (exit 1, not a refutation).
    let mut unknown = 0;
    let mut edits = Vec::new();
    for item in &program.items {
        let text = collapse(&source.text[item.span.start..item.span.end]);
        let at_item = |e: Error| locate(e, source, item.span);
        match (&item.kind, mode) {
            (ItemKind::Simplify { expr, .. }, Mode::Simplify) => {
                let s = engine.simplify(expr).map_err(at_item)?;
                let input = text.strip_prefix("simplify ").unwrap_or(&text);
                let input = input.split(" expect ").next().unwrap_or(input);
                reporter.simplified(item.line, input, &s);
            }
            // Nothing to prove, but an input error must still be reported.
            (
                ItemKind::Simplify {
                    expr, expect: None, ..
                },
                Mode::Check,
            ) => {
                engine.simplify(expr).map_err(at_item)?;
            }
            (
                ItemKind::Simplify {
                    expr,
                    expect: Some(r),
                    expect_span,
                },
                Mode::Check,
            ) => {
                let v = engine.check(expr, r).map_err(at_item)?;
                let ok = reporter.verdict(item.line, "expected result", &text, &v);
                let away_only = matches!(v, crate::engine::Verdict::ProvedAway(_));
                if let (false, true, Some(span)) = (ok, opts.accept, expect_span) {
                    // Record the normal form in the input syntax, which
                    // parses back to the same expression, spelt and laid
                    // out as the old one.
                    let s = engine.simplify(expr).map_err(at_item)?;
                    let old = &source.text[span.start..span.end];
                    let statement = &source.text[item.span.start..item.span.end];
                    let around = [statement, source.text.as_str()];
                    let new = crate::accept::in_layout_of(old, &around, |style| {
                        crate::term::print::Printer::new(&program.ctx, style).term(&s.term)
                    });
                    edits.push((*span, new));
                }
                if away_only {
                    away += 1
                } else if ok {
                    proved += 1
                } else {
                    failed += 1
                }
            }
            (ItemKind::Claim { lhs, rhs, slip }, Mode::Check) => {
                let v = engine.check(lhs, rhs).map_err(at_item)?;
                let input = text.strip_prefix("slip ").unwrap_or(&text);
                let ok = reporter.verdict(
                    item.line,
                    "claim",
                    input.strip_prefix("claim ").unwrap_or(input),
                    &v,
                );
                if *slip {
                    // Caught only when refuted: a search stopped on a limit
                    // catches nothing.
                    let refuted =
                        matches!(&v, crate::engine::Verdict::NotProved(s) if s.stop.is_saturated());
                    reporter.slip(refuted, ok);
                    if refuted {
                        caught += 1
                    } else {
                        failed += 1
                    }
                } else if matches!(v, crate::engine::Verdict::ProvedAway(_)) {
                    away += 1
                } else if ok {
                    proved += 1
                } else {
                    failed += 1
                }
            }
            (ItemKind::Claim { .. }, Mode::Simplify) => {}
            (
                ItemKind::Derivation {
                    name,
                    start,
                    steps,
                    free,
                    slip,
                },
                _,
            ) => {
                // With a model, steps the rules do not prove are tried with
                // the model's correlators in place, then numerically.
                let session_ref = if program.numeric.model.is_some() {
                    Some(
                        numeric_session(&mut session, &program, &engine, &mut reporter)
                            .map_err(at_item)?,
                    )
                } else {
                    None
                };
                let prover = session_ref.map(|s| {
                    move |b: &crate::term::Term, a: &crate::term::Term| s.prove_in_model(b, a)
                });
                let mut report = crate::derive::check(
                    &engine,
                    start,
                    steps,
                    opts.style,
                    prover.as_ref().map(|p| p as &crate::derive::ModelProver),
                )
                .map_err(at_item)?;
                if let Some(s) = session_ref {
                    let mut before = start;
                    for (r, after) in report.iter_mut().zip(steps.iter().map(|s| &s.expr)) {
                        match &r.verdict {
                            crate::derive::StepVerdict::Proved { contact: None, .. } => {}
                            // Proved away from coincident points, where the
                            // steps differ by contact terms: those are
                            // checked by flux, and a difference there refutes
                            // the step.
                            crate::derive::StepVerdict::Proved {
                                contact: Some(contact),
                                ..
                            } => {
                                let contact = contact.clone();
                                let proved = r.verdict.clone();
                                numeric_step(s, &program.ctx, before, after, free, opts.jobs, r);
                                match &r.verdict {
                                    crate::derive::StepVerdict::Confirmed { .. } => {
                                        r.numeric = Some(format!(
                                            "proved away from coincident points; {}",
                                            r.numeric.clone().unwrap_or_default()
                                        ));
                                    }
                                    _ if r
                                        .numeric
                                        .as_deref()
                                        .is_some_and(|n| n.starts_with("by flux")) =>
                                    {
                                        r.verdict = crate::derive::StepVerdict::Refuted {
                                            remainder: contact.remainder,
                                            diagnosis: contact.diagnosis,
                                        };
                                    }
                                    _ => r.verdict = proved,
                                }
                            }
                            _ => numeric_step(s, &program.ctx, before, after, free, opts.jobs, r),
                        }
                        before = after;
                    }
                }
                let (ok, pointwise, numerically, bad) =
                    reporter.derivation(item.line, name, start, &report);
                if *slip && mode == Mode::Check {
                    // Caught when some step is refuted and none is left
                    // open by a limit.
                    let refuted = report
                        .iter()
                        .any(|r| matches!(r.verdict, crate::derive::StepVerdict::Refuted { .. }));
                    let open = report
                        .iter()
                        .any(|r| matches!(r.verdict, crate::derive::StepVerdict::Unknown { .. }));
                    reporter.slip(refuted && !open, bad == 0);
                    proved += ok;
                    away += pointwise;
                    confirmed += numerically;
                    if refuted && !open {
                        caught += bad;
                    } else {
                        failed += bad.max(1);
                    }
                } else if mode == Mode::Check {
                    proved += ok;
                    away += pointwise;
                    confirmed += numerically;
                    failed += bad;
                }
            }
            (
                ItemKind::Scan {
                    param,
                    from,
                    to,
                    steps,
                    lhs,
                    rhs,
                    free,
                    output,
                },
                _,
            ) => {
                let s = numeric_session(&mut session, &program, &engine, &mut reporter)
                    .map_err(at_item)?;
                let mut progress = |done: usize, total: usize| {
                    if opts.progress {
                        eprint!("\rline {}: scan {done}/{total}", item.line);
                        if done == total {
                            eprintln!();
                        }
                    }
                };
                let input = text.strip_prefix("scan ").unwrap_or(&text);
                let scan = match s.scan(
                    param,
                    *from,
                    *to,
                    *steps,
                    lhs,
                    rhs,
                    free,
                    opts.jobs,
                    &mut progress,
                ) {
                    Ok(scan) => scan,
                    Err(e) if e.kind == ErrorKind::Numeric => {
                        reporter.numeric_unknown(item.line, "scan", input, &numeric_reason(&e));
                        unknown += 1;
                        continue;
                    }
                    Err(e) => return Err(at_item(e)),
                };
                // The figure fits the title to its width.
                let title = format!("scan {}", input.split(" into ").next().unwrap_or(input));
                let written = match output {
                    Some(stem) if !opts.keep_scan_files => {
                        let labels = crate::plot::Labels::scan(&program.ctx, param, &title);
                        Some(write_scan(&scan, base, stem, &labels).map_err(at_item)?)
                    }
                    _ => None,
                };
                let verdict = reporter.scanned(item.line, input, &scan, written.as_deref());
                if mode == Mode::Check {
                    match verdict {
                        Agreement::Agree => confirmed += 1,
                        Agreement::Disagree => failed += 1,
                        Agreement::Unknown(_) => unknown += 1,
                    }
                }
            }
            (
                ItemKind::Decompose {
                    corr,
                    channel,
                    dims,
                    output,
                },
                _,
            ) => {
                let s = numeric_session(&mut session, &program, &engine, &mut reporter)
                    .map_err(at_item)?;
                let input = text.strip_prefix("decompose ").unwrap_or(&text);
                // A numeric failure (a block without a value at some ξ, an
                // empty tower) leaves this statement unknown; the rest of
                // the file is still checked.
                let found = match s.decompose(corr, *channel, dims) {
                    Ok(found) => found,
                    Err(e) if e.kind == ErrorKind::Numeric => {
                        reporter.numeric_unknown(
                            item.line,
                            "decompose",
                            input,
                            &numeric_reason(&e),
                        );
                        unknown += 1;
                        continue;
                    }
                    Err(e) => return Err(at_item(e)),
                };
                let written = match output {
                    Some(stem) if !opts.keep_scan_files => {
                        let scan = crate::numeric::session::Scan {
                            param: "xi".into(),
                            labels: vec![String::new()],
                            rows: found
                                .rows
                                .iter()
                                .map(|(x, g, e)| (*x, vec![*g], vec![*e]))
                                .collect(),
                            judged: found
                                .rows
                                .iter()
                                .map(|(_, g, e)| {
                                    let size = g.abs().max(e.abs()).max(f64::MIN_POSITIVE);
                                    let r = (g - e).abs() / size;
                                    let verdict =
                                        if r <= crate::numeric::decompose::DECOMPOSE_TOLERANCE {
                                            Agreement::Agree
                                        } else {
                                            Agreement::Disagree
                                        };
                                    vec![(r, verdict)]
                                })
                                .collect(),
                        };
                        let body = input.split(" into ").next().unwrap_or(input);
                        let labels = crate::plot::Labels::decompose(&format!("decompose {body}"));
                        Some(write_scan(&scan, base, stem, &labels).map_err(at_item)?)
                    }
                    _ => None,
                };
                let ok = reporter.decomposed(item.line, input, &found, written.as_deref());
                if mode == Mode::Check {
                    if ok {
                        confirmed += 1
                    } else {
                        failed += 1
                    }
                }
            }
            (
                ItemKind::Evaluate { .. }
                | ItemKind::Solve { .. }
                | ItemKind::Flux { .. }
                | ItemKind::Compare { .. },
                _,
            ) => {
                let s = numeric_session(&mut session, &program, &engine, &mut reporter)
                    .map_err(at_item)?;
                let count = s.sample_count();
                let mut progress = |done: usize, total: usize| {
                    if opts.progress && total > 1 {
                        eprint!("\rline {}: sample {done}/{total}", item.line);
                        if done == total {
                            eprintln!();
                        }
                    }
                };
                // Configurations on their own copies of the session (in
                // parallel), reported in order.
                let configurations: Vec<usize> = (0..count).collect();
                let results = crate::jobs::map_ordered(
                    opts.jobs,
                    &configurations,
                    true,
                    |_, &k| {
                        let view = s.on_sample(k);
                        let points = view.select(k);
                        Ok::<_, std::convert::Infallible>((points, numeric_item(&view, &item.kind)))
                    },
                    &mut progress,
                );
                // The statements after this one see the last configuration.
                s.select(count.saturating_sub(1));
                for (k, result) in results.into_iter().flatten().enumerate() {
                    let (points, result) = result;
                    if count > 1 {
                        reporter.sample(k + 1, &points);
                    }
                    // A numeric failure (no real value, quadrature that did
                    // not converge, …) leaves this statement unknown; the
                    // rest of the file is still checked.
                    match result
                        .map(|r| numeric_report(&r, &item.kind, item.line, &text, &mut reporter))
                    {
                        Ok(Some(Agreement::Agree)) if mode == Mode::Check => confirmed += 1,
                        Ok(Some(Agreement::Disagree)) if mode == Mode::Check => failed += 1,
                        Ok(Some(Agreement::Unknown(_))) if mode == Mode::Check => unknown += 1,
                        Ok(_) => {}
                        Err(e) if e.kind == ErrorKind::Numeric => {
                            let kind = text.split_whitespace().next().unwrap_or("statement");
                            let input = text.strip_prefix(kind).unwrap_or(&text).trim_start();
                            reporter.numeric_unknown(item.line, kind, input, &numeric_reason(&e));
                            unknown += 1;
                        }
                        Err(e) => return Err(at_item(e)),
                    }
                }
            }
            (
                ItemKind::Classify {
                    name,
                    family,
                    normal_component,
                },
                _,
            ) => {
                let s = engine.simplify(normal_component).map_err(at_item)?;
                reporter.classified(item.line, name, family, &s.term);
            }
        }
    }
    if mode == Mode::Check {
        reporter.summary(proved, away, confirmed, caught, failed, unknown);
    }
    Ok(Outcome {
        report: reporter.finish(),
        code: i32::from(failed + unknown > 0),
        edits,
    })
}

/// A numeric error's message and notes, for an unknown verdict.
fn numeric_reason(e: &Error) -> String {
    let mut lines = vec![e.message.clone()];
    lines.extend(e.notes.iter().cloned());
    lines.join("\n")
}

fn read_source(path: &Path) -> Result<Arc<Source>> {
    crate::files::read_text(path)
}

/// The shipped rules, then `--rules` files, then the file's `rules "…"`
/// (relative to `base`).
pub fn load_rules(program: &Program, base: &Path, opts: &Options) -> Result<RuleBook> {
    let mut book = RuleBook::shipped()?;
    for path in &opts.rules {
        book.load(&read_source(path)?)?;
    }
    for (rel, span) in &program.rule_files {
        let path = base.join(rel);
        let source = read_source(&path).map_err(|e| {
            Error::at(ErrorKind::Io, &program.source, *span, e.message).with_label("this rule file")
        })?;
        book.load(&source).map_err(|e| match e.at {
            Some(_) => e,
            None => e
                .with_span(&program.source, *span)
                .with_label("this rule file"),
        })?;
    }
    Ok(book)
}

/// The names after `by` in every derivation are rules or known moves; a
/// misspelt one is an input error before anything runs.
fn check_citations(
    source: &Arc<Source>,
    program: &lower::Program,
    book: &crate::rules::RuleBook,
) -> Result<()> {
    for item in &program.items {
        let ItemKind::Derivation { steps, .. } = &item.kind else {
            continue;
        };
        let rules = book.rules.iter().map(|r| r.name.as_str());
        if let Err((name, span, nearest)) = crate::derive::check_citations(rules, steps) {
            let moves: Vec<&str> = crate::derive::MOVES.iter().map(|(m, _)| *m).collect();
            let mut e = Error::new(
                ErrorKind::Name,
                format!("`{name}` is neither a rule nor a move"),
            )
            .with_span(source, span)
            .with_label("cited here");
            if let Some(n) = nearest {
                e = e.with_note(format!("did you mean `{n}`?"));
            }
            return Err(e.with_note(format!(
                "after `by` come rule names (e.g. `ward-divergence`) or moves: {}",
                moves.join(", ")
            )));
        }
    }
    Ok(())
}

/// Errors from later stages carry no span; point them at the statement.
fn locate(mut e: Error, source: &Arc<Source>, span: crate::syntax::ast::Span) -> Error {
    if e.at.is_none() {
        e = e.with_span(source, span);
        if e.label.is_empty() {
            e.label = "in this statement".into();
        }
    }
    e
}

/// A statement's text on one line.
fn collapse(text: &str) -> String {
    let without_comments: Vec<&str> = text
        .lines()
        .map(|l| l.split('#').next().unwrap_or(""))
        .collect();
    without_comments
        .join(" ")
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ")
}

#[cfg(test)]
mod tests {
    use super::{common_ratio, small_fraction};

    #[test]
    fn fractions_are_found_only_when_they_fit() {
        assert_eq!(small_fraction(2.0 / 3.0), Some((2, 3)));
        assert_eq!(small_fraction(-1.5), Some((-3, 2)));
        assert_eq!(small_fraction(2.0), Some((2, 1)));
        assert_eq!(small_fraction(std::f64::consts::PI), None);
        assert_eq!(small_fraction(1e-12), None);
        assert_eq!(small_fraction(f64::NAN), None);
        assert_eq!(common_ratio(&[0.5, 0.5 + 1e-12]), Some(0.5));
        assert_eq!(common_ratio(&[0.5]), None);
        assert_eq!(common_ratio(&[0.5, 0.6]), None);
        assert_eq!(common_ratio(&[1.0, 1.0]), None);
    }
}
