//! The LaTeX report of a [`FileOutcome`]: a fragment a paper can `\input`
//! (with `amsmath` loaded). Every statement is a display (`align*`) or a
//! table; numbers are written as numbers with their error
//! (`-4.2142 \times 10^{-1} \pm 1.0 \times 10^{-14}`); words are in
//! `\text{…}` in ASCII; where a statement is in the file, the model and
//! the closing count are LaTeX comments, so nothing of the plain-text
//! report shows in the paper.

use std::fmt::Write as _;

use crate::numeric::agreement::{Agreement, Value};
use crate::outcome::{
    Change, Check, Coincidence, Expr, FileOutcome, Finding, Indices, Mode, Slip, Statement, Status,
    StepNumeric, TermChange,
};
use crate::term::print::Style;

/// Rows of a scan shown in its table (evenly spaced when there are more).
const SCAN_ROWS: usize = 21;
/// Longest statement text echoed in a comment.
const COMMENT_WIDTH: usize = 110;

/// The whole fragment.
pub fn render(o: &FileOutcome) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "% wardsmith: {}", comment(&o.file));
    if o.nothing_to_check {
        let _ = writeln!(
            out,
            "% nothing to check: no statement to simplify, prove or evaluate"
        );
        return out;
    }
    for (k, s) in o.statements.iter().enumerate() {
        if k == o.model_before {
            model(&mut out, o);
        }
        statement(&mut out, s);
    }
    if o.model_before >= o.statements.len() {
        model(&mut out, o);
    }
    if o.mode == Mode::Check {
        let _ = writeln!(out, "% {}", o.tally.summary());
    }
    out
}

fn model(out: &mut String, o: &FileOutcome) {
    if let Some(m) = &o.model {
        let _ = writeln!(out, "% model: {}", comment(m));
    }
}

/// Text for a comment: one line, no control characters.
fn comment(s: &str) -> String {
    s.replace(['\n', '\r'], " ")
}

/// Prose inside `\text{…}`: ASCII, with LaTeX's special characters escaped.
pub(crate) fn words(s: &str) -> String {
    let ascii = crate::charset::to_ascii(s);
    let mut out = String::with_capacity(ascii.len());
    for c in ascii.chars() {
        match c {
            '\\' => out.push_str("\\textbackslash{}"),
            '{' | '}' | '%' | '$' | '&' | '#' | '_' => {
                out.push('\\');
                out.push(c);
            }
            '^' => out.push_str("\\^{}"),
            '~' => out.push_str("\\~{}"),
            '<' => out.push_str("\\textless{}"),
            '>' => out.push_str("\\textgreater{}"),
            '|' => out.push_str("\\textbar{}"),
            c if c.is_control() => out.push(' '),
            c => out.push(c),
        }
    }
    out
}

/// A number in math mode: `-4.214201946636 \times 10^{-1}`; `digits`
/// after the point.
pub(crate) fn number(v: f64, digits: usize) -> String {
    if !v.is_finite() {
        return "\\text{n/a}".into();
    }
    if v == 0.0 {
        return "0".into();
    }
    let s = format!("{v:.digits$e}");
    let (mantissa, exponent) = s.split_once('e').unwrap_or((&s, "0"));
    let exponent: i32 = exponent.parse().unwrap_or(0);
    if exponent == 0 {
        mantissa.to_string()
    } else {
        format!("{mantissa} \\times 10^{{{exponent}}}")
    }
}

/// A value with its error estimate (quadrature error and rounding bound).
fn value(v: &Value) -> String {
    let error = v.error + v.rounding;
    match v.loss() {
        Some(loss) => format!(
            "{} \\pm {}\\ \\text{{(not known: {})}}",
            number(v.value, 3),
            number(error, 1),
            words(&loss.to_string())
        ),
        None if error > 0.0 => format!("{} \\pm {}", number(v.value, 12), number(error, 1)),
        None => number(v.value, 12),
    }
}

/// The verdict word of a numeric check.
fn agreement(a: &Agreement) -> String {
    match a {
        Agreement::Agree => "agree".into(),
        Agreement::Disagree => "disagree".into(),
        Agreement::Unknown(why) => format!("unknown: {}", words(why)),
    }
}

/// `_{\nu = 0}` for a component, nothing for a scalar.
fn component(i: &Indices) -> String {
    if i.0.is_empty() {
        return String::new();
    }
    let parts: Vec<String> =
        i.0.iter()
            .map(|(n, k)| format!("{} = {k}", crate::term::latex::name(n)))
            .collect();
    format!("_{{{}}}", parts.join(",\\,"))
}

fn coincidences(cs: &[Coincidence]) -> String {
    cs.iter()
        .map(|c| format!("${}$", c.print(Style::Latex)))
        .collect::<Vec<_>>()
        .join(", ")
}

fn tex(e: &Expr) -> String {
    e.print(Style::Latex)
}

fn statement(out: &mut String, s: &Statement) {
    let input: String = s.input.chars().take(COMMENT_WIDTH).collect();
    // Some statements keep their keyword in the input text.
    let keyword = match input.strip_prefix(s.keyword()) {
        Some(rest) if rest.starts_with(' ') => String::new(),
        _ => format!("{} ", s.keyword()),
    };
    let _ = writeln!(out, "% line {}: {keyword}{}", s.line, comment(&input));
    if let Some(sample) = &s.sample {
        let points: Vec<String> = sample
            .points
            .iter()
            .map(|p| {
                let c: Vec<String> = p.coordinates.iter().map(|v| format!("{v:.4}")).collect();
                format!("{} = ({})", p.point, c.join(", "))
            })
            .collect();
        let _ = writeln!(
            out,
            "% sample {}: {}",
            sample.index,
            comment(&points.join(", "))
        );
    }
    let slip = match s.slip {
        Some(crate::outcome::SlipMark::Caught) => "; marked slip: caught",
        Some(crate::outcome::SlipMark::Holds) => "; marked slip, but it holds",
        Some(crate::outcome::SlipMark::Open) => "; marked slip, but not refuted",
        None => "",
    };
    match &s.finding {
        Finding::Simplify(x) => {
            let note = if x.away_from.is_empty() {
                String::new()
            } else {
                format!(" && \\text{{where {}}}", coincidences(&x.away_from))
            };
            display(
                out,
                &[format!("{} &= {}{note}", tex(&x.expr), tex(&x.result))],
            );
        }
        Finding::Expect(x) => verdict(out, &tex(&x.expr), &tex(&x.expected), &x.check, slip),
        Finding::Claim(x) => verdict(out, &tex(&x.lhs), &tex(&x.rhs), &x.check, slip),
        Finding::Classify(c) => {
            let name = crate::term::latex::name(&c.generator);
            let note = if c.preserved { "preserved" } else { "broken" };
            display(
                out,
                &[format!(
                    "{name}_{{n}}\\big|_{{\\text{{boundary}}}} &= {} && \\text{{{note} ({})}}",
                    tex(&c.normal_component),
                    words(&c.family)
                )],
            );
        }
        Finding::Derivation(d) => {
            let mut lines = vec![format!("& {}", tex(&d.start))];
            for step in &d.steps {
                let mut note = step.cited.join(", ");
                let status = match step.status {
                    Status::Proved => None,
                    Status::ProvedAway => {
                        Some(format!("proved where {}", coincidences(&step.away_from)))
                    }
                    Status::Confirmed => Some("checked numerically".to_string()),
                    Status::NotProved => Some(match &step.slip {
                        Some(slip) => format!("not proved: {}", slip_words(slip)),
                        None => "not proved".to_string(),
                    }),
                    Status::Unknown => Some(format!(
                        "unknown: {}",
                        words(&step.stop.as_ref().map(|s| s.describe()).unwrap_or_default())
                    )),
                };
                let mut note = words(&std::mem::take(&mut note));
                if let Some(status) = status {
                    note = if note.is_empty() {
                        status
                    } else {
                        format!("{note}; {status}")
                    };
                }
                if let Some(n) = &step.numeric {
                    note = format!("{note}; {}", numeric_words(n));
                }
                let note = if note.is_empty() {
                    String::new()
                } else {
                    format!(" && \\text{{{note}}}")
                };
                lines.push(format!("&= {}{note}", tex(&step.expr)));
            }
            if !slip.is_empty() {
                if let Some(last) = lines.last_mut() {
                    last.push_str(&format!(" \\quad \\text{{({})}}", &slip[2..]));
                }
            }
            display(out, &lines);
        }
        Finding::Evaluate(e) => {
            let lines: Vec<String> = e
                .components
                .iter()
                .map(|c| {
                    format!(
                        "\\text{{value}}{} &= {}",
                        component(&c.index),
                        value(&c.value)
                    )
                })
                .collect();
            display(out, &lines);
        }
        Finding::Solve(x) => {
            let name = crate::term::latex::name(&x.unknown);
            let mut lines = Vec::new();
            if let Some(e) = &x.exact {
                let away = if x.exact_away_from.is_empty() {
                    String::new()
                } else {
                    format!(", where {}", coincidences(&x.exact_away_from))
                };
                lines.push(format!("{name} &= {} && \\text{{exactly{away}}}", tex(e)));
            }
            lines.push(format!(
                "{name} &= {} && \\text{{largest residual }} {}",
                number(x.value, 12),
                number(x.residual, 1)
            ));
            display(out, &lines);
        }
        Finding::Perturb(p) => {
            let mut lines = Vec::new();
            for o in &p.orders {
                lines.push(format!("\\delta_{{{}}} &= {}", o.order, value(&o.value)));
                if let Some(log) = &o.log {
                    lines.push(format!(
                        "\\text{{coefficient of }} \\ln(1/\\varepsilon) &= {}",
                        value(log)
                    ));
                }
                for d in &o.powers {
                    lines.push(format!(
                        "\\text{{dropped: }} \\varepsilon^{{{}}} &\\times {}",
                        number(d.exponent, 3),
                        value(&d.coefficient)
                    ));
                }
            }
            lines.push(format!("\\text{{total}} &= {}", value(&p.total)));
            for e in &p.expects {
                let which = match e.order {
                    Some(k) => format!("\\delta_{{{k}}}"),
                    None => "\\text{total}".to_string(),
                };
                lines.push(format!(
                    "{which}\\ \\text{{expected}} &= {} && \\text{{{}, relative difference }} {}",
                    value(&e.expected),
                    agreement(&e.verdict),
                    number(e.relative_difference, 1)
                ));
            }
            display(out, &lines);
        }
        Finding::Compare(c) => {
            let mut lines = Vec::new();
            for k in &c.components {
                lines.push(format!(
                    "\\text{{left}}{} &= {}",
                    component(&k.index),
                    value(&k.left)
                ));
                lines.push(format!(
                    "\\text{{right}}{} &= {} && \\text{{{}, relative difference }} {}",
                    component(&k.index),
                    value(&k.right),
                    agreement(&k.verdict),
                    number(k.relative_difference, 1)
                ));
            }
            display(out, &lines);
        }
        Finding::Flux(f) => {
            let mut lines = Vec::new();
            for a in &f.around {
                for c in &a.components {
                    lines.push(format!(
                        "\\text{{flux around }} {}{} &= {}",
                        crate::outcome::latex_point(&a.point),
                        component(&c.index),
                        value(&c.flux)
                    ));
                    lines.push(format!(
                        "\\text{{contact terms}} &= {} && \\text{{{}}}",
                        value(&c.contact),
                        agreement(&a.verdict)
                    ));
                }
            }
            for a in &f.away {
                lines.push(format!(
                    "|\\partial \\cdot J| &= {} && \\text{{against }} |J|/r = {}\\ \\text{{({})}}",
                    number(a.divergence.value.abs(), 1),
                    number(a.scale, 1),
                    agreement(&a.verdict)
                ));
            }
            display(out, &lines);
        }
        Finding::Scan(scan) => {
            let columns = scan.labels.len().max(1);
            let _ = writeln!(out, "\\begin{{center}}");
            let _ = writeln!(out, "\\begin{{tabular}}{{r{}}}", "rrr".repeat(columns));
            let mut head = vec![format!("${}$", crate::term::latex::name(&scan.param))];
            for label in &scan.labels {
                let label = if label.is_empty() {
                    String::new()
                } else {
                    format!(" {}", words(label))
                };
                head.push(format!("left{label}"));
                head.push(format!("right{label}"));
                head.push("rel. diff.".to_string());
            }
            let _ = writeln!(out, "{} \\\\ \\hline", head.join(" & "));
            let n = scan.rows.len();
            let shown: Vec<usize> = if n <= SCAN_ROWS {
                (0..n).collect()
            } else {
                (0..SCAN_ROWS)
                    .map(|k| k * (n - 1) / (SCAN_ROWS - 1))
                    .collect()
            };
            for k in shown {
                let row = &scan.rows[k];
                let mut cells = vec![format!("${}$", number(row.x, 6))];
                for c in 0..row.left.len() {
                    let err = |e: &[f64]| {
                        e.get(c)
                            .filter(|e| **e > 0.0)
                            .map(|e| format!(" \\pm {}", number(*e, 1)))
                            .unwrap_or_default()
                    };
                    cells.push(format!(
                        "${}{}$",
                        number(row.left[c], 10),
                        err(&row.left_error)
                    ));
                    cells.push(format!(
                        "${}{}$",
                        number(row.right[c], 10),
                        err(&row.right_error)
                    ));
                    cells.push(format!(
                        "${}${}",
                        number(
                            row.relative_difference.get(c).copied().unwrap_or(f64::NAN),
                            1
                        ),
                        match row.verdicts.get(c) {
                            Some(Agreement::Disagree) => " (disagree)",
                            Some(Agreement::Unknown(_)) => " (unknown)",
                            _ => "",
                        }
                    ));
                }
                let _ = writeln!(out, "{} \\\\", cells.join(" & "));
            }
            let _ = writeln!(out, "\\end{{tabular}}");
            let _ = writeln!(out, "\\end{{center}}");
            let _ = writeln!(
                out,
                "% scan {}",
                match &scan.verdict {
                    Agreement::Agree => "agrees".to_string(),
                    Agreement::Disagree => "disagrees".to_string(),
                    Agreement::Unknown(why) => format!("unknown: {}", comment(why)),
                }
            );
        }
        Finding::Decompose(d) => {
            use crate::syntax::ast::Channel;
            let found = &d.fit;
            let (dim, coefficient) = match found.channel {
                Channel::Bulk => ("\\Delta", "\\lambda a"),
                Channel::Boundary => ("\\hat\\Delta", "\\mu^2"),
                Channel::SChannel => ("\\Delta", "\\lambda^2"),
            };
            let coefficients = super::coefficients(found);
            let mut lines = Vec::new();
            if let Some(c) = &coefficients.identity {
                lines.push(format!("\\text{{identity}} &= {}", coefficient_tex(c)));
            }
            for (k, (dimension, c)) in found.dims.iter().zip(&coefficients.blocks).enumerate() {
                let spin = found
                    .spins
                    .get(k)
                    .map_or(String::new(), |l| format!(", \\ell = {l}"));
                lines.push(format!(
                    "{coefficient}\\big|_{{{dim} = {}{spin}}} &= {}{}",
                    number(*dimension, 6)
                        .trim_end_matches('0')
                        .trim_end_matches('.'),
                    coefficient_tex(c),
                    relative_tex(c)
                ));
            }
            if let Some(last) = lines.last_mut() {
                last.push_str(&format!(
                    " && \\text{{{}, largest difference }} {}",
                    if d.holds {
                        "the expansion holds"
                    } else {
                        "not an expansion in these blocks"
                    },
                    number(found.residual, 1)
                ));
            }
            display(out, &lines);
        }
        Finding::Structures(x) => {
            let _ = writeln!(out, "% line {}: {}", s.line, comment(&s.input));
            for l in super::structures_lines(x) {
                let _ = writeln!(out, "% {}", comment(&l));
            }
        }
        Finding::Failed(f) => {
            let reason = f.reason.lines().next().unwrap_or("");
            let _ = writeln!(
                out,
                "\\par\\noindent\\textit{{{} on line {}: unknown ({})}}\\par",
                words(&f.statement),
                s.line,
                words(reason)
            );
        }
    }
}

/// Claims and expected results: the equation and its status.
fn verdict(out: &mut String, lhs: &str, rhs: &str, c: &Check, slip: &str) {
    let status = match c.status {
        Status::Proved => "proved".to_string(),
        Status::ProvedAway => format!("proved where {}", coincidences(&c.away_from)),
        Status::Confirmed => "confirmed numerically".to_string(),
        Status::NotProved => "not proved".to_string(),
        Status::Unknown => format!("unknown: {}", words(&c.search.stop.describe())),
    };
    let mut lines = vec![format!(
        "{lhs} &= {rhs} && \\text{{{status}{}}}",
        words(slip)
    )];
    if !c.remainder.is_zero() {
        lines.push(format!(
            "\\text{{left}} - \\text{{right}} &= {} && \\text{{{}}}",
            tex(&c.remainder),
            match c.status {
                Status::ProvedAway => "contact terms at the coincidences",
                Status::Unknown => "remainder, not final",
                _ => "remainder",
            }
        ));
    }
    display(out, &lines);
}

/// An `align*` of the lines.
fn display(out: &mut String, lines: &[String]) {
    if lines.is_empty() {
        return;
    }
    let _ = writeln!(out, "\\begin{{align*}}");
    let _ = writeln!(out, "  {}", lines.join("\n  \\\\ "));
    let _ = writeln!(out, "\\end{{align*}}");
}

/// A slip in words, with its mathematics in `$…$`.
fn slip_words(s: &Slip) -> String {
    match s {
        Slip::Sign => "off by a sign".into(),
        Slip::Factor { ratio } => format!("the step before is ${}$ times this one", tex(ratio)),
        Slip::Contact { at, change } => {
            let what = match change {
                Change::Missing => "missing",
                Change::Extra => "extra",
                Change::Coefficient => "with a different coefficient",
            };
            format!(
                "the contact term at ${}$ is {what}",
                crate::outcome::latex_point(at)
            )
        }
        Slip::Term { term, change } => {
            let shown = match term {
                None => "the constant term".to_string(),
                Some(t) => format!("the term with ${}$", tex(t)),
            };
            match change {
                TermChange::Missing => format!("{shown} is missing"),
                TermChange::Extra => format!("{shown} is extra"),
                TermChange::Coefficient { before, after } => format!(
                    "{shown} has coefficient ${}$, not ${}$",
                    tex(after),
                    tex(before)
                ),
            }
        }
        Slip::ContactTerms => "the contact terms at the coincident points differ".into(),
        Slip::Remainder => "the steps differ".into(),
    }
}

/// What the model found, in a few words.
fn numeric_words(n: &StepNumeric) -> String {
    match n {
        StepNumeric::NotEvaluated { .. } => "not evaluated on the model".into(),
        StepNumeric::Undecided { .. } => "not decided on the model".into(),
        StepNumeric::Differs { ratio: Some(r), .. } => match r.fraction {
            Some((p, 1)) => format!("on the model the step before is ${p}$ times this one"),
            Some((p, q)) => {
                format!("on the model the step before is $\\frac{{{p}}}{{{q}}}$ times this one")
            }
            None => format!(
                "on the model the step before is ${}$ times this one",
                number(r.value, 9)
            ),
        },
        StepNumeric::Differs { .. } => "the model's values differ".into(),
        StepNumeric::FluxNotChecked { .. } => "not checked by flux".into(),
        StepNumeric::FluxDiffers { around, .. } => format!(
            "by flux: the contact term at ${}$ differs",
            crate::outcome::latex_point(around)
        ),
        StepNumeric::NotConserved { .. } => "by flux: not conserved".into(),
        StepNumeric::FluxConfirmed => "confirmed by flux".into(),
    }
}

/// A fitted coefficient: a fraction, a number with its uncertainty, or 0.
fn coefficient_tex(c: &super::Coefficient) -> String {
    use super::Shape;
    match c.shape {
        Shape::Zero if c.value == 0.0 && c.spread == 0.0 => "0".to_string(),
        Shape::Zero => format!("0 \\pm {}", number(c.spread, 1)),
        Shape::Undetermined => format!(
            "{} \\pm {}\\ \\text{{(not determined)}}",
            number(c.value, 6),
            number(c.spread, 1)
        ),
        Shape::Fraction(p, 1) => format!("{p}"),
        Shape::Fraction(p, q) if p < 0 => format!("-\\frac{{{}}}{{{q}}}", -p),
        Shape::Fraction(p, q) => format!("\\frac{{{p}}}{{{q}}}"),
        Shape::Exact => number(c.value, 12),
        Shape::Uncertain => format!("{} \\pm {}", number(c.value, 12), number(c.spread, 1)),
    }
}

/// ` = \frac{1}{2} \times \text{identity}`.
fn relative_tex(c: &super::Coefficient) -> String {
    match c.relative {
        None => String::new(),
        Some((_, Some((p, 1)))) => format!(" = {p} \\times \\text{{identity}}"),
        Some((_, Some((p, q)))) if p < 0 => {
            format!(" = -\\frac{{{}}}{{{q}}} \\times \\text{{identity}}", -p)
        }
        Some((_, Some((p, q)))) => format!(" = \\frac{{{p}}}{{{q}}} \\times \\text{{identity}}"),
        Some((r, None)) => format!(" = {} \\times \\text{{identity}}", number(r, 10)),
    }
}
