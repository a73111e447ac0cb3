//! Text reports of simplifications and checks, as the command line prints
//! them. Output depends only on the input, never on timing or ids, so it
//! can be snapshot-tested byte for byte.

use std::fmt::Write as _;

use crate::context::Context;
use crate::engine::{Simplified, Verdict};
use crate::numeric::agreement::{self, Agreement};
use crate::numeric::session::{Evaluation, FluxReport, Scan, Solution, Value};
use crate::term::print::{Printer, Style};
use crate::term::Term;

/// A JSON string literal.
fn js(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 2);
    out.push('"');
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\n' => out.push_str("\\n"),
            '\t' => out.push_str("\\t"),
            c if c.is_control() => out.push_str(&format!("\\u{:04x}", c as u32)),
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// A JSON number (null for NaN or infinity, which JSON cannot hold).
fn json_number(v: f64) -> String {
    if v.is_finite() {
        format!("{v:e}")
    } else {
        "null".into()
    }
}

/// Two evaluations together, component by component, by the numeric
/// layer's one agreement rule.
pub(crate) fn agreement(left: &Evaluation, right: &Evaluation) -> Agreement {
    left.components
        .iter()
        .zip(&right.components)
        .fold(Agreement::Agree, |all, ((_, l), (_, r))| {
            all.and(crate::numeric::agreement::agreement(l, r))
        })
}

/// `nu = 0, mu = 2: ` for a component, nothing for a scalar.
fn components(assignment: &[(String, usize)]) -> String {
    if assignment.is_empty() {
        return String::new();
    }
    let parts: Vec<String> = assignment
        .iter()
        .map(|(n, k)| format!("{n} = {k}"))
        .collect();
    format!("{}: ", parts.join(", "))
}

/// `0.123456789012` or `0.1234567 ± 3.0e-12 (quadrature, 1234 evaluations)`;
/// a value that is not known says so instead of showing digits it does not
/// have.
fn number(v: &Value) -> String {
    if let Some(loss) = v.loss() {
        return if no_digit(v) {
            format!(
                "{:.3e} ± {:.1e} (not known: {loss})",
                v.value,
                v.rounding + v.error
            )
        } else {
            // Some digits are left: as many as the bound allows.
            let digits = (v.value.abs() / v.rounding)
                .log10()
                .floor()
                .clamp(0.0, 12.0) as usize;
            format!(
                "{:.*e} ± {:.1e} (rounding: digits lost to cancellation)",
                digits,
                v.value,
                v.rounding + v.error
            )
        };
    }
    if v.nodes == 0 {
        format!("{:.12e}", v.value)
    } else {
        format!(
            "{:.12e} ± {:.1e} ({} evaluations)",
            v.value, v.error, v.nodes
        )
    }
}

/// True if a value has no digit left: it overflowed, underflowed, or its
/// rounding bound is as large as it.
fn no_digit(v: &Value) -> bool {
    match v.loss() {
        None => false,
        Some(agreement::Loss::Cancellation) => v.rounding >= v.value.abs(),
        Some(_) => true,
    }
}

/// Longest statement text echoed in a verdict line.
/// Terms of a derivation step's remainder printed before the rest is counted.
const REMAINDER_TERMS: usize = 12;
const INPUT_WIDTH: usize = 110;

/// `text` cut to `width` characters, with `…` where it was cut.
fn abbreviate(text: &str, width: usize) -> String {
    if text.chars().count() <= width {
        text.to_string()
    } else {
        let cut: String = text.chars().take(width.saturating_sub(1)).collect();
        format!("{}…", cut.trim_end())
    }
}

/// Longest normal form printed on a single line.
const LINE_WIDTH: usize = 100;

/// Writes report lines for one file, in the one form asked for: text
/// (Unicode, ASCII or LaTeX) or JSON. The other forms are never built.
pub struct Reporter<'a> {
    /// JSON objects, one per statement, when the output is JSON (then no
    /// text is written).
    json: Option<Vec<String>>,
    latex: Printer<'a>,
    /// (proved, proved away from coincident points, confirmed numerically,
    /// not proved).
    counts: (usize, usize, usize, usize),
    /// Statements marked `slip` that were refuted, as marked.
    caught: usize,
    /// Numeric statements that could not be decided.
    unknown: usize,
    printer: Printer<'a>,
    out: String,
}

impl<'a> Reporter<'a> {
    pub fn new(ctx: &'a Context, style: Style) -> Reporter<'a> {
        Reporter {
            json: None,
            latex: Printer::new(ctx, Style::Latex),
            counts: (0, 0, 0, 0),
            caught: 0,
            unknown: 0,
            printer: Printer::new(ctx, style),
            out: String::new(),
        }
    }

    /// A reporter whose `finish` gives one JSON document for scripts.
    pub fn json(ctx: &'a Context) -> Reporter<'a> {
        Reporter {
            json: Some(Vec::new()),
            ..Reporter::new(ctx, Style::Unicode)
        }
    }

    pub fn finish(self) -> String {
        match self.json {
            None if self.printer.style == Style::Ascii => crate::charset::to_ascii(&self.out),
            None => self.out,
            Some(entries) => format!(
                "{{\"items\": [\n{}\n], \"proved\": {}, \"proved_away\": {}, \"confirmed\": {}, \"slips_caught\": {}, \"not_proved\": {}, \"unknown\": {}}}\n",
                entries.join(",\n"),
                self.counts.0,
                self.counts.1,
                self.counts.2,
                self.caught,
                self.counts.3,
                self.unknown
            ),
        }
    }

    /// True when the output is text (then no JSON is built).
    fn text(&self) -> bool {
        self.json.is_none()
    }

    /// Records a JSON object for one statement; `fields` is called only
    /// when the output is JSON.
    fn entry(&mut self, fields: impl FnOnce(&Self) -> Vec<(&'static str, String)>) {
        if self.json.is_none() {
            return;
        }
        let body: Vec<String> = fields(self)
            .iter()
            .map(|(k, v)| format!("{}: {v}", js(k)))
            .collect();
        if let Some(entries) = &mut self.json {
            entries.push(format!("{{{}}}", body.join(", ")));
        }
    }

    /// `line N: simplify` with the input and its normal form.
    pub fn simplified(&mut self, line: usize, input: &str, s: &Simplified) {
        if self.text() {
            let _ = writeln!(self.out, "line {line}: simplify {input}");
            let _ = writeln!(self.out, "  = {}", self.layout(&s.term, "    "));
            if !s.caveats.is_empty() {
                let _ = writeln!(
                    self.out,
                    "  (holds where {}: there, derivatives of explicit functions were taken pointwise)",
                    self.coincidences(&s.caveats).join(", ")
                );
            }
            let _ = writeln!(self.out, "  [{}]", stats(s));
        }
        self.entry(|r| {
            let rules: Vec<String> = s
                .applied
                .iter()
                .map(|(n, k)| format!("{}: {k}", js(n)))
                .collect();
            vec![
                ("line", line.to_string()),
                ("kind", js("simplify")),
                ("input", js(input)),
                ("result", js(&r.printer.term(&s.term))),
                ("latex", js(&r.latex.term(&s.term))),
                ("stop", js(&s.stop.describe())),
                ("e_nodes", s.nodes.to_string()),
                ("rules", format!("{{{}}}", rules.join(", "))),
            ]
        });
    }

    /// Whether a conformal Killing vector is preserved by the boundary.
    pub fn classified(
        &mut self,
        line: usize,
        name: &str,
        family: &str,
        normal: &crate::term::Term,
    ) {
        self.entry(|r| {
            vec![
                ("line", line.to_string()),
                ("kind", js("classify")),
                ("generator", js(name)),
                ("family", js(family)),
                ("preserved", normal.is_zero().to_string()),
                ("normal_component", js(&r.printer.term(normal))),
            ]
        });
        if !self.text() {
            return;
        }
        if normal.is_zero() {
            let _ = writeln!(
                self.out,
                "line {line}: {name} ({family}) is preserved: {name}[n] = 0 on the boundary"
            );
        } else {
            let _ = writeln!(
                self.out,
                "line {line}: {name} ({family}) is broken: on the boundary {name}[n] = {}",
                self.printer.term(normal)
            );
        }
    }

    /// The verdict on a claim or an expected result.
    pub fn verdict(&mut self, line: usize, what: &str, input: &str, v: &Verdict) -> bool {
        let (status, s) = match v {
            Verdict::Proved(s) => ("proved", s),
            Verdict::ProvedAway(s) => ("proved away from coincident points", s),
            Verdict::NotProved(s) if s.stop.is_saturated() => ("not proved", s),
            Verdict::NotProved(s) => ("unknown", s),
        };
        self.entry(|r| {
            let away: Vec<String> = r.coincidences(&s.caveats).iter().map(|c| js(c)).collect();
            vec![
                ("line", line.to_string()),
                ("kind", js(what)),
                ("input", js(input)),
                ("status", js(status)),
                ("away_from", format!("[{}]", away.join(", "))),
                ("remainder", js(&r.printer.term(&s.term))),
                ("stop", js(&s.stop.describe())),
                ("e_nodes", s.nodes.to_string()),
            ]
        });
        if !self.text() {
            return !matches!(v, Verdict::NotProved(_));
        }
        let input = abbreviate(input, INPUT_WIDTH);
        let input = input.as_str();
        match v {
            Verdict::Proved(s) => {
                let _ = writeln!(self.out, "line {line}: {what} proved: {input}");
                let _ = writeln!(self.out, "  [{}]", stats(s));
                true
            }
            Verdict::ProvedAway(s) => {
                let _ = writeln!(
                    self.out,
                    "line {line}: {what} proved away from coincident points: {input}"
                );
                let _ = writeln!(
                    self.out,
                    "  it holds where {}; there, derivatives of explicit functions were taken \
                     pointwise and the contact terms are not fixed",
                    self.coincidences(&s.caveats).join(", ")
                );
                if !s.term.is_zero() {
                    let _ = writeln!(
                        self.out,
                        "  the two sides differ by contact terms there:\n    {}",
                        self.layout(&s.term, "    ")
                    );
                }
                let _ = writeln!(self.out, "  [{}]", stats(s));
                true
            }
            Verdict::NotProved(s) => {
                let status = if s.stop.is_saturated() {
                    "NOT PROVED"
                } else {
                    "UNKNOWN"
                };
                let _ = writeln!(self.out, "line {line}: {what} {status}: {input}");
                let _ = writeln!(
                    self.out,
                    "  left side minus right side simplifies to:\n    {}",
                    self.layout(&s.term, "    ")
                );
                let reason = if s.stop.is_saturated() {
                    "the rules saturated: nothing more applies, so the two sides differ by the remainder above".to_string()
                } else if let crate::egraph::Stop::Undecided(why) = &s.stop {
                    format!("the rules saturated, but {why}; so the claim is neither proved nor refuted")
                } else {
                    format!(
                        "the e-graph {}; the remainder is not final, so the claim is neither proved nor refuted",
                        s.stop.describe()
                    )
                };
                let _ = writeln!(self.out, "  stop reason: {reason}");
                let _ = writeln!(self.out, "  [{}]", stats(s));
                false
            }
        }
    }

    /// The coincidences a result does not cover, as conditions under
    /// which it holds: `x ≠ x1`, `x - x1 ≠ 0`.
    pub fn coincidences(&self, caveats: &crate::normal::Caveats) -> Vec<String> {
        use crate::normal::Singular;
        let mut out: Vec<String> = Vec::new();
        for c in caveats {
            let text = match &c.at {
                Singular::Point(p) => {
                    let mut pair = [point_name(&c.var), point_name(p)];
                    pair.sort();
                    format!("{} ≠ {}", pair[0], pair[1])
                }
                Singular::Zeros(t) => format!("{} ≠ 0", self.printer.term(t)),
            };
            if !out.contains(&text) {
                out.push(text);
            }
        }
        out
    }

    /// A term on one line if it is short, otherwise one summand per line.
    fn layout(&self, t: &crate::term::Term, indent: &str) -> String {
        let one_line = self.printer.term(t);
        if one_line.chars().count() <= LINE_WIDTH {
            return one_line;
        }
        self.printer.terms(t).join(&format!("\n{indent}"))
    }

    /// Like `layout`, with at most `cap` terms and a count of the rest.
    fn layout_capped(&self, t: &crate::term::Term, indent: &str, cap: usize) -> String {
        let terms = self.printer.terms(t);
        if terms.len() <= cap {
            return self.layout(t, indent);
        }
        format!(
            "{}\n{indent}… and {} more terms ({} in all)",
            terms[..cap].join(&format!("\n{indent}")),
            terms.len() - cap,
            terms.len()
        )
    }

    /// `line N: scan` with its table (every row up to 21, else 21 evenly
    /// spaced rows; both sides and their relative difference) and where the
    /// files went. Judged like `compare`: the sides must agree at every row.
    pub fn scanned(
        &mut self,
        line: usize,
        input: &str,
        scan: &Scan,
        written: Option<&str>,
    ) -> Agreement {
        let all = scan
            .judged
            .iter()
            .flatten()
            .fold(Agreement::Agree, |all, (_, v)| all.and(v.clone()));
        // The first row where the sides differ, else the first not known.
        let first = |unknown: bool| {
            scan.rows
                .iter()
                .zip(&scan.judged)
                .find_map(|((x, _, _), row)| {
                    row.iter()
                        .find(|(_, v)| !v.agrees() && v.is_unknown() == unknown)
                        .map(|(_, v)| (*x, v.clone()))
                })
        };
        let first_bad = first(false).or_else(|| first(true));
        let (verdict, status) = match &all {
            Agreement::Agree => ("agree", "agree"),
            Agreement::Disagree => ("DISAGREE", "disagree"),
            Agreement::Unknown(_) => ("UNKNOWN", "unknown"),
        };
        let rows: Vec<String> = scan
            .rows
            .iter()
            .zip(&scan.judged)
            .map(|((x, l, r), j)| {
                let diffs: Vec<String> = j.iter().map(|(d, _)| json_number(*d)).collect();
                format!(
                    "{{\"{}\": {}, \"left\": [{}], \"right\": [{}], \"relative_difference\": [{}]}}",
                    scan.param,
                    json_number(*x),
                    l.iter().map(|v| json_number(*v)).collect::<Vec<_>>().join(", "),
                    r.iter().map(|v| json_number(*v)).collect::<Vec<_>>().join(", "),
                    diffs.join(", ")
                )
            })
            .collect();
        let fields = [
            ("line", line.to_string()),
            ("kind", js("scan")),
            ("input", js(input)),
            ("status", js(status)),
            ("rows", format!("[{}]", rows.join(", "))),
        ];
        self.entry(|_| fields.to_vec());
        let _ = writeln!(
            self.out,
            "line {line}: scan {verdict}: {}",
            abbreviate(input, INPUT_WIDTH)
        );
        let n = scan.rows.len();
        let shown: Vec<usize> = if n <= 21 {
            (0..n).collect()
        } else {
            (0..21).map(|k| k * (n - 1) / 20).collect()
        };
        for k in shown {
            let (x, left, right) = &scan.rows[k];
            let judged = &scan.judged[k];
            let pairs: Vec<String> = left
                .iter()
                .zip(right)
                .zip(&scan.labels)
                .zip(judged)
                .map(|(((l, r), label), (d, v))| {
                    let label = if label.is_empty() {
                        String::new()
                    } else {
                        format!("{label}: ")
                    };
                    let mark = match v {
                        Agreement::Agree => "",
                        Agreement::Disagree => " ← disagree",
                        Agreement::Unknown(_) => " ← unknown",
                    };
                    format!("{label}{l:.10e} | {r:.10e} | {d:.1e}{mark}")
                })
                .collect();
            let _ = writeln!(self.out, "  {} = {x:.6}: {}", scan.param, pairs.join(";  "));
        }
        if let Some((x, v)) = first_bad {
            let why = match v {
                Agreement::Unknown(why) => format!("not known: {why}"),
                _ => "the two sides differ".to_string(),
            };
            let _ = writeln!(self.out, "  first at {} = {x:.6}: {why}", scan.param);
        }
        if let Some(files) = written {
            let _ = writeln!(self.out, "  written: {files}");
        }
        all
    }

    /// `line N: decompose` with the coefficients (exact fractions where
    /// they fit one), the residual and where the files went; true when the
    /// expansion holds to the tolerance.
    pub fn decomposed(
        &mut self,
        line: usize,
        input: &str,
        found: &crate::numeric::decompose::Decomposition,
        written: Option<&str>,
    ) -> bool {
        use crate::lower::Channel;
        let ok = found.holds();
        let (channel, name, coefficient) = match found.channel {
            Channel::Bulk => ("bulk", "Δ", "λa"),
            Channel::Boundary => ("boundary", "Δ̂", "μ²"),
        };
        // A coefficient with its uncertainty; a fraction only when it is
        // determined far better than the fraction's own precision.
        let largest = found
            .coefficients
            .iter()
            .chain(found.identity.iter())
            .fold(0.0f64, |m, c| m.max(c.abs()));
        let value = |v: f64, spread: f64| {
            let scale = v.abs().max(1e-300);
            if spread <= 1e-6 * largest && v.abs() <= 3.0 * spread + 1e-12 * largest {
                return format!("0 (|{v:.1e}| within its uncertainty {spread:.1e})");
            }
            if spread > 1e-3 * scale {
                return format!("{v:.6e} (not determined: moves by {spread:.1e} with the range)");
            }
            let fraction = if spread <= 1e-11 * scale {
                crate::run::small_fraction(v)
                    .filter(|(p, q)| ((*p as f64 / *q as f64) - v).abs() <= 1e-11 * scale)
            } else {
                None
            };
            match fraction {
                Some((p, 1)) => format!("{p} ({v:.12e})"),
                Some((p, q)) => format!("{p}/{q} ({v:.12e})"),
                None if spread <= 1e-12 * scale => format!("{v:.12e}"),
                None => format!("{v:.12e} ± {spread:.1e}"),
            }
        };
        // In units of the identity's coefficient, where the fit has one.
        let relative = |v: f64| match found.identity {
            Some(c) if c != 0.0 => {
                let r = v / c;
                match crate::run::small_fraction(r)
                    .filter(|(p, q)| ((*p as f64 / *q as f64) - r).abs() <= 1e-11 * r.abs())
                {
                    Some((p, 1)) => format!(" = {p} × the identity's"),
                    Some((p, q)) => format!(" = {p}/{q} × the identity's"),
                    None => format!(" = {r:.10e} × the identity's"),
                }
            }
            _ => String::new(),
        };
        let spread = |k: usize| found.spread.get(k).copied().unwrap_or(0.0);
        let shift = usize::from(found.identity.is_some());
        let fields = [
            ("line", line.to_string()),
            ("kind", js("decompose")),
            ("input", js(input)),
            ("channel", js(channel)),
            ("delta", json_number(found.delta)),
            (
                "identity",
                found.identity.map_or("null".into(), json_number),
            ),
            (
                "dimensions",
                format!(
                    "[{}]",
                    found
                        .dims
                        .iter()
                        .map(|v| json_number(*v))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ),
            (
                "coefficients",
                format!(
                    "[{}]",
                    found
                        .coefficients
                        .iter()
                        .map(|v| json_number(*v))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ),
            (
                "uncertainties",
                format!(
                    "[{}]",
                    found
                        .spread
                        .iter()
                        .map(|v| json_number(*v))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ),
            ("residual", json_number(found.residual)),
            ("status", js(if ok { "agree" } else { "disagree" })),
            ("holds", ok.to_string()),
        ];
        self.entry(|_| fields.to_vec());
        if !self.text() {
            return ok;
        }
        let _ = writeln!(
            self.out,
            "line {line}: decompose {}",
            abbreviate(input, INPUT_WIDTH)
        );
        let _ = writeln!(
            self.out,
            "  {channel} channel, Δ = {}: {} block{} fitted at {} values of ξ in [{}, {}], checked at {} others",
            found.delta,
            found.dims.len(),
            if found.dims.len() == 1 { "" } else { "s" },
            found.fitted_at,
            found.range.0,
            found.range.1,
            found.checked_at
        );
        if let Some(c) = found.identity {
            let _ = writeln!(self.out, "  identity: {}", value(c, spread(0)));
        }
        for (k, (dim, c)) in found.dims.iter().zip(&found.coefficients).enumerate() {
            let _ = writeln!(
                self.out,
                "  {name} = {dim}: {coefficient} = {}{}",
                value(*c, spread(k + shift)),
                relative(*c)
            );
        }
        let _ = writeln!(
            self.out,
            "  {}: largest difference {:.1e} of the largest |G|",
            if ok {
                "the expansion holds"
            } else {
                "NOT an expansion in these blocks"
            },
            found.residual
        );
        if let Some(files) = written {
            let _ = writeln!(self.out, "  written: {files}");
        }
        ok
    }

    /// A derivation step by step; returns the steps proved, confirmed
    /// numerically, and neither.
    pub fn derivation(
        &mut self,
        line: usize,
        name: &str,
        start: &Term,
        steps: &[crate::derive::StepReport],
    ) -> (usize, usize, usize, usize) {
        use crate::derive::StepVerdict;
        let text = self.text();
        if text {
            let _ = writeln!(self.out, "line {line}: derivation {name}");
        }
        let (mut ok, mut pointwise, mut confirmed, mut bad) = (0, 0, 0, 0);
        let mut objects = Vec::new();
        for (k, step) in steps.iter().enumerate() {
            let claimed = if step.claimed.is_empty() {
                String::new()
            } else {
                format!(" (cited: {})", step.claimed.join(", "))
            };
            let (status, detail) = match &step.verdict {
                StepVerdict::Proved {
                    rules,
                    away,
                    in_model,
                    contact,
                } => {
                    if away.is_empty() {
                        ok += 1;
                    } else {
                        pointwise += 1;
                    }
                    let mut by = if rules.is_empty() {
                        "normalisation".to_string()
                    } else {
                        rules.join(", ")
                    };
                    // A cited rule that did not fire: the step holds
                    // without it, which may not be what the author meant.
                    let unused: Vec<&str> = step
                        .claimed
                        .iter()
                        .map(String::as_str)
                        .filter(|c| !crate::derive::MOVES.iter().any(|(m, _)| m == c))
                        .filter(|c| !rules.iter().any(|r| r == c))
                        .collect();
                    if !unused.is_empty() {
                        by = format!("{by}; cited but not used: {}", unused.join(", "));
                    }
                    if *in_model {
                        by = format!("{by}, with the model's correlators in place");
                    }
                    if let Some(contact) = contact {
                        by = format!(
                            "{by}; there the steps differ by contact terms that nothing checked: {}",
                            self.printer.term(&contact.terms)
                        );
                    }
                    if away.is_empty() {
                        if text {
                            let _ = writeln!(
                                self.out,
                                "  step {} (line {}): proved by {by}{claimed}",
                                k + 1,
                                step.line
                            );
                        }
                        ("proved", by)
                    } else {
                        if text {
                            let _ = writeln!(
                            self.out,
                            "  step {} (line {}): proved away from coincident points ({}) by {by}{claimed}",
                            k + 1,
                            step.line,
                            self.coincidences(away).join(", ")
                        );
                        }
                        ("proved away from coincident points", by)
                    }
                }
                StepVerdict::Refuted {
                    remainder,
                    diagnosis: why,
                }
                | StepVerdict::Unknown {
                    remainder,
                    reason: why,
                } => {
                    bad += 1;
                    let (status, head) = match &step.verdict {
                        StepVerdict::Unknown { .. } => ("unknown", "UNKNOWN: the e-graph "),
                        _ => ("not proved", "NOT PROVED: "),
                    };
                    if text {
                        let _ = writeln!(
                            self.out,
                            "  step {} (line {}): {head}{why}{claimed}",
                            k + 1,
                            step.line
                        );
                    }
                    if text {
                        let _ = writeln!(
                            self.out,
                            "    step before minus this step: {}",
                            self.layout_capped(remainder, "      ", REMAINDER_TERMS)
                        );
                    }
                    (status, why.clone())
                }
                StepVerdict::Confirmed { samples } => {
                    confirmed += 1;
                    let by = format!("numerically on {samples} configuration(s) of the model");
                    if text {
                        let _ = writeln!(
                            self.out,
                            "  step {} (line {}): confirmed {by}, not by the rules{claimed}",
                            k + 1,
                            step.line
                        );
                    }
                    ("confirmed", by)
                }
            };
            if let Some(note) = &step.numeric {
                if text {
                    let _ = writeln!(self.out, "    numerically: {note}");
                }
            }
            if !text {
                objects.push(format!(
                "{{\"step\": {}, \"line\": {}, \"status\": {}, \"detail\": {}, \"numeric\": {}}}",
                k + 1,
                step.line,
                js(status),
                js(&detail),
                step.numeric
                    .as_deref()
                    .map_or_else(|| "null".to_string(), js)
            ));
            }
        }
        if text {
            let _ = writeln!(
                self.out,
                "  {} of {} steps hold",
                ok + pointwise + confirmed,
                steps.len()
            );
        }
        if text && self.printer.style == Style::Latex {
            // The chain itself, ready to paste into a paper.
            if text {
                let _ = writeln!(
                    self.out,
                    "\\begin{{align*}}\n  & {}",
                    self.latex.term(start)
                );
            }
            for step in steps {
                let mut note = step.claimed.join(", ");
                let status = match &step.verdict {
                    StepVerdict::Proved { away, .. } if away.is_empty() => None,
                    StepVerdict::Proved { .. } => Some("away from coincident points"),
                    StepVerdict::Confirmed { .. } => Some("checked numerically"),
                    _ => Some("not proved"),
                };
                if let Some(status) = status {
                    note = if note.is_empty() {
                        status.into()
                    } else {
                        format!("{note}; {status}")
                    };
                }
                let note = if note.is_empty() {
                    String::new()
                } else {
                    format!(" && \\text{{{note}}}")
                };
                if text {
                    let _ = writeln!(self.out, "  \\\\ &= {}{note}", self.latex.term(&step.expr));
                }
            }
            if text {
                let _ = writeln!(self.out, "\\end{{align*}}");
            }
        }
        self.entry(|_| {
            vec![
                ("line", line.to_string()),
                ("kind", js("derivation")),
                ("name", js(name)),
                ("steps", format!("[{}]", objects.join(", "))),
            ]
        });
        (ok, pointwise, confirmed, bad)
    }

    /// Which sample the following numeric lines are for, and its points.
    pub fn sample(&mut self, k: usize, points: &[(String, Vec<f64>)]) {
        let listed: Vec<String> = points
            .iter()
            .map(|(n, p)| {
                let coords: Vec<String> = p.iter().map(|x| format!("{x:.4}")).collect();
                format!("{n} = ({})", coords.join(", "))
            })
            .collect();
        let _ = writeln!(self.out, "sample {k}: {}", listed.join(", "));
    }

    /// The model numeric statements use.
    pub fn model(&mut self, description: &str) {
        let _ = writeln!(self.out, "model: {description}");
    }

    /// `line N: evaluate` with one value per component; the reason when a
    /// value is not known (its digits are not shown).
    pub fn evaluated(&mut self, line: usize, input: &str, e: &Evaluation) -> Option<String> {
        self.entry(|_| {
            let v: Vec<String> = e
                .components
                .iter()
                .map(|(_, v)| json_number(v.value))
                .collect();
            vec![
                ("line", line.to_string()),
                ("kind", js("evaluate")),
                ("input", js(input)),
                ("values", format!("[{}]", v.join(", "))),
            ]
        });
        let lost = e.components.iter().find_map(|(_, v)| {
            v.loss().filter(|_| no_digit(v)).map(|loss| {
                agreement::describe_loss("evaluated", v, loss).replacen(" side", " value", 1)
            })
        });
        if !self.text() {
            return lost;
        }
        let _ = writeln!(
            self.out,
            "line {line}: evaluate {}",
            abbreviate(input, INPUT_WIDTH)
        );
        for (assignment, v) in &e.components {
            let _ = writeln!(self.out, "  {}{}", components(assignment), number(v));
        }
        lost
    }

    /// `line N: solve` with the value found, exact when the algebra
    /// settled it.
    pub fn solved(
        &mut self,
        line: usize,
        input: &str,
        unknown: &str,
        s: &Solution,
        exact: Option<&crate::engine::Solved>,
    ) {
        self.entry(|r| {
            vec![
                ("line", line.to_string()),
                ("kind", js("solve")),
                ("input", js(input)),
                ("unknown", js(unknown)),
                ("value", json_number(s.value)),
                ("residual", json_number(s.residual)),
                (
                    "exact",
                    exact.map_or_else(|| "null".to_string(), |e| js(&r.printer.term(&e.value))),
                ),
            ]
        });
        if !self.text() {
            return;
        }
        let _ = writeln!(
            self.out,
            "line {line}: solve {}",
            abbreviate(input, INPUT_WIDTH)
        );
        if let Some(e) = exact {
            let away = if e.caveats.is_empty() {
                String::new()
            } else {
                format!(
                    " (the equation then holds where {})",
                    self.coincidences(&e.caveats).join(", ")
                )
            };
            let _ = writeln!(
                self.out,
                "  {unknown} = {}  exactly, for every value of the other parameters{away}",
                self.printer.term(&e.value)
            );
        }
        let from = if s.component.is_empty() {
            String::new()
        } else {
            format!(
                "from the component {}",
                components(&s.component).trim_end_matches(": ")
            ) + "; "
        };
        let _ = writeln!(
            self.out,
            "  {unknown} = {:.12e}  ({from}largest residual at the solution {:.1e})",
            s.value, s.residual
        );
    }

    /// `line N: flux` insertion by insertion, judged by the agreement rule:
    /// each flux against its contact terms, and the divergence away from
    /// insertions against the size of the current there.
    pub fn flux(&mut self, line: usize, input: &str, r: &FluxReport) -> Agreement {
        let mut rows = String::new();
        let mut all = Agreement::Agree;
        let mut failing = Vec::new();
        for check in &r.around {
            let verdict = agreement(&check.flux, &check.contact);
            let _ = writeln!(
                rows,
                "  around {}: {}",
                check.point,
                match &verdict {
                    Agreement::Agree => "flux = contact terms".to_string(),
                    Agreement::Disagree => "flux ≠ contact terms  ← disagree".to_string(),
                    Agreement::Unknown(why) => format!("unknown: {why}"),
                }
            );
            if !verdict.agrees() {
                failing.push(js(&check.point));
            }
            all = all.and(verdict);
            for ((assignment, f), (_, c)) in
                check.flux.components.iter().zip(&check.contact.components)
            {
                let _ = writeln!(
                    rows,
                    "    {}flux {}, contact {}",
                    components(assignment),
                    number(f),
                    number(c)
                );
            }
        }
        for c in &r.away {
            let verdict = agreement::vanishes(&c.largest, c.scale);
            let at: Vec<String> = c.at.iter().map(|x| format!("{x:.3}")).collect();
            let _ = writeln!(
                rows,
                "  away from insertions, at ({}): |divergence| {:.1e} against |current|/r {:.1e}{}",
                at.join(", "),
                c.largest.value.abs(),
                c.scale,
                match &verdict {
                    Agreement::Agree => String::new(),
                    Agreement::Disagree => "  ← not conserved".to_string(),
                    Agreement::Unknown(why) => format!("  ← unknown: {why}"),
                }
            );
            all = all.and(verdict);
        }
        let (verdict, status) = match &all {
            Agreement::Agree => ("holds", "holds"),
            Agreement::Disagree => ("FAILS", "fails"),
            Agreement::Unknown(_) => ("UNKNOWN", "unknown"),
        };
        self.entry(|_| {
            vec![
                ("line", line.to_string()),
                ("kind", js("flux")),
                ("input", js(input)),
                ("status", js(status)),
                ("failing_insertions", format!("[{}]", failing.join(", "))),
            ]
        });
        if self.text() {
            let _ = writeln!(
                self.out,
                "line {line}: flux {verdict}: {}",
                abbreviate(input, INPUT_WIDTH)
            );
            self.out.push_str(&rows);
        }
        all
    }

    /// `line N: compare` with both sides per component, judged by the
    /// agreement rule (`numeric::agreement`).
    pub fn compared(
        &mut self,
        line: usize,
        input: &str,
        left: &Evaluation,
        right: &Evaluation,
    ) -> Agreement {
        let mut all = Agreement::Agree;
        let mut rows = String::new();
        for ((assignment, l), (_, r)) in left.components.iter().zip(&right.components) {
            let verdict = agreement::agreement(l, r);
            let _ = writeln!(
                rows,
                "  {}left {}, right {}, relative difference {:.1e}{}",
                components(assignment),
                number(l),
                number(r),
                agreement::relative_difference(l, r),
                match &verdict {
                    Agreement::Agree => String::new(),
                    Agreement::Disagree => "  ← disagree".into(),
                    Agreement::Unknown(why) => format!("  ← unknown: {why}"),
                }
            );
            all = all.and(verdict);
        }
        let (verdict, status) = match &all {
            Agreement::Agree => ("agree", "agree"),
            Agreement::Disagree => ("DISAGREE", "disagree"),
            Agreement::Unknown(_) => ("UNKNOWN", "unknown"),
        };
        let values = |e: &Evaluation| -> String {
            let v: Vec<String> = e
                .components
                .iter()
                .map(|(_, v)| json_number(v.value))
                .collect();
            format!("[{}]", v.join(", "))
        };
        self.entry(|_| {
            vec![
                ("line", line.to_string()),
                ("kind", js("compare")),
                ("input", js(input)),
                ("status", js(status)),
                ("left", values(left)),
                ("right", values(right)),
            ]
        });
        if self.text() {
            let _ = writeln!(
                self.out,
                "line {line}: compare {verdict}: {}",
                abbreviate(input, INPUT_WIDTH)
            );
            self.out.push_str(&rows);
        }
        all
    }

    /// `line N: <statement> UNKNOWN` for a numeric statement that could not
    /// be carried out (quadrature that did not converge, a value without a
    /// real value, a dimension without integrals); the rest of the file is
    /// still checked.
    pub fn numeric_unknown(&mut self, line: usize, kind: &str, input: &str, why: &str) {
        self.entry(|_| {
            vec![
                ("line", line.to_string()),
                ("kind", js(kind)),
                ("input", js(input)),
                ("status", js("unknown")),
                ("reason", js(why)),
            ]
        });
        if !self.text() {
            return;
        }
        let _ = writeln!(
            self.out,
            "line {line}: {kind} UNKNOWN: {}",
            abbreviate(input, INPUT_WIDTH)
        );
        for (k, text) in why.lines().enumerate() {
            let head = if k == 0 { "numerically: " } else { "  " };
            let _ = writeln!(self.out, "  {head}{text}");
        }
    }

    /// The line under a statement marked `slip`: caught (refuted, as
    /// marked), or not, and why (`held`: it holds after all).
    pub fn slip(&mut self, caught: bool, held: bool) {
        let line = if caught {
            "marked `slip`: refuted, as marked; the slip is caught"
        } else if held {
            "marked `slip`, but it holds: nothing is caught (remove `slip` if it is right)"
        } else {
            "marked `slip`, but it was neither proved nor refuted (a limit stopped the search, or the remainder is undecided): nothing is caught"
        };
        if let Some(entries) = &mut self.json {
            if let Some(last) = entries.last_mut() {
                if last.ends_with('}') {
                    last.pop();
                    last.push_str(&format!(
                        ", \"slip\": {}}}",
                        js(if caught { "caught" } else { "not caught" })
                    ));
                }
            }
        }
        let _ = writeln!(self.out, "  {line}");
    }

    /// The closing count of a check.
    pub fn summary(
        &mut self,
        proved: usize,
        away: usize,
        confirmed: usize,
        caught: usize,
        failed: usize,
        unknown: usize,
    ) {
        self.counts = (proved, away, confirmed, failed);
        self.caught = caught;
        self.unknown = unknown;
        let mut parts = vec![format!("{proved} proved")];
        if away > 0 {
            parts.push(format!("{away} proved away from coincident points"));
        }
        if confirmed > 0 {
            parts.push(format!("{confirmed} confirmed numerically"));
        }
        if caught > 0 {
            parts.push(format!("{caught} slip(s) caught"));
        }
        parts.push(format!("{failed} not proved"));
        if unknown > 0 {
            parts.push(format!("{unknown} unknown"));
        }
        let _ = writeln!(self.out, "{}", parts.join(", "));
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

/// `saturated; 2 rounds, 3 iterations, 40 e-nodes; rules: a ×1, b ×2`.
fn stats(s: &Simplified) -> String {
    let rules = if s.applied.is_empty() {
        "no rule applied".to_string()
    } else {
        let names: Vec<String> = s.applied.iter().map(|(n, k)| format!("{n} ×{k}")).collect();
        format!("rules: {}", names.join(", "))
    };
    format!(
        "{}; {} round(s), {} iteration(s), {} e-nodes; {rules}",
        s.stop.describe(),
        s.rounds,
        s.iterations,
        s.nodes
    )
}
