//! The text report (Unicode or ASCII) of a [`FileOutcome`], as the command
//! line prints it. A function of the outcome alone: byte-stable, so it can
//! be snapshot-tested.

use std::fmt::Write as _;

use crate::numeric::agreement::{Agreement, Value};
use crate::outcome::{
    Change, Check, ClaimCheck, Classification, Coincidence, Compared, Decomposed, Derivation,
    Evaluated, Expectation, Expr, Failure, FileOutcome, Finding, FluxChecked, Indices, Mode,
    Perturbed, PointAt, Scanned, Search, Simplification, Slip, SlipMark, Solved, Statement, Status,
    StepNumeric, TermChange,
};
use crate::term::print::Style;

/// Longest statement text echoed in a verdict line.
const INPUT_WIDTH: usize = 110;
/// Longest normal form printed on a single line.
const LINE_WIDTH: usize = 100;
/// Terms of a derivation step's remainder printed before the rest is counted.
const REMAINDER_TERMS: usize = 12;

/// The whole report in `style` (Unicode or ASCII; in ASCII the prose is
/// transliterated too).
pub fn render(o: &FileOutcome, style: Style) -> String {
    let mut t = Text {
        style,
        out: String::new(),
    };
    if o.nothing_to_check {
        return "nothing to check: no statement to simplify, prove or evaluate\n".into();
    }
    for (k, s) in o.statements.iter().enumerate() {
        if k == o.model_before {
            t.model(o);
        }
        t.statement(s);
    }
    if o.model_before >= o.statements.len() {
        t.model(o);
    }
    if o.mode == Mode::Check {
        let _ = writeln!(t.out, "{}", o.tally.summary());
    }
    if style == Style::Ascii {
        crate::charset::to_ascii(&t.out)
    } else {
        t.out
    }
}

/// The closing line of a file's text report (what `test` shows per file).
pub fn closing_line(o: &FileOutcome) -> String {
    if o.nothing_to_check {
        "nothing to check: no statement to simplify, prove or evaluate".into()
    } else if o.mode == Mode::Check {
        o.tally.summary()
    } else {
        String::new()
    }
}

struct Text {
    style: Style,
    out: String,
}

/// `text` cut to `width` characters, with `…` where it was cut.
pub(crate) fn abbreviate(text: &str, width: usize) -> String {
    if text.chars().count() <= width {
        text.to_string()
    } else {
        let cut: String = text.chars().take(width.saturating_sub(1)).collect();
        format!("{}…", cut.trim_end())
    }
}

/// `nu = 0, mu = 2: ` for a component, nothing for a scalar.
fn components(assignment: &Indices) -> String {
    if assignment.0.is_empty() {
        return String::new();
    }
    let parts: Vec<String> = assignment
        .0
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
        return if crate::check::no_digit(v) {
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

/// `saturated; 2 rounds, 3 iterations, 40 e-nodes; rules: a ×1, b ×2`.
fn stats(s: &Search) -> String {
    let rules = if s.rules.is_empty() {
        "no rule applied".to_string()
    } else {
        let names: Vec<String> = s.rules.iter().map(|(n, k)| format!("{n} ×{k}")).collect();
        format!("rules: {}", names.join(", "))
    };
    format!(
        "{}; {} round(s), {} iteration(s), {} e-nodes; {rules}",
        s.stop.describe(),
        s.rounds,
        s.iterations,
        s.e_nodes
    )
}

/// The points of a configuration: `x1 = (0.1000, 0.2000)`.
fn points(ps: &[PointAt]) -> String {
    ps.iter()
        .map(|p| {
            let c: Vec<String> = p.coordinates.iter().map(|v| format!("{v:.4}")).collect();
            format!("{} = ({})", p.point, c.join(", "))
        })
        .collect::<Vec<_>>()
        .join(", ")
}

impl Text {
    fn model(&mut self, o: &FileOutcome) {
        if let Some(m) = &o.model {
            let _ = writeln!(self.out, "model: {m}");
        }
    }

    fn print(&self, e: &Expr) -> String {
        e.print(self.style)
    }

    fn coincidences(&self, cs: &[Coincidence]) -> String {
        cs.iter()
            .map(|c| c.print(self.style))
            .collect::<Vec<_>>()
            .join(", ")
    }

    /// A term on one line if it is short, otherwise one summand per line.
    fn layout(&self, t: &Expr, indent: &str) -> String {
        let one_line = self.print(t);
        if one_line.chars().count() <= LINE_WIDTH {
            return one_line;
        }
        t.terms(self.style).join(&format!("\n{indent}"))
    }

    /// Like `layout`, with at most `cap` terms and a count of the rest.
    fn layout_capped(&self, t: &Expr, indent: &str, cap: usize) -> String {
        let terms = t.terms(self.style);
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

    fn statement(&mut self, s: &Statement) {
        if let Some(sample) = &s.sample {
            let _ = writeln!(
                self.out,
                "sample {}: {}",
                sample.index,
                points(&sample.points)
            );
        }
        let (line, input) = (s.line, s.input.as_str());
        match &s.finding {
            Finding::Simplify(x) => self.simplified(line, input, x),
            Finding::Expect(x) => self.expected(line, input, x),
            Finding::Claim(x) => self.claim(line, input, x),
            Finding::Derivation(x) => self.derivation(line, x),
            Finding::Classify(x) => self.classified(line, x),
            Finding::Evaluate(x) => self.evaluated(line, input, x),
            Finding::Solve(x) => self.solved(line, input, x),
            Finding::Flux(x) => self.flux(line, input, x),
            Finding::Compare(x) => self.compared(line, input, x),
            Finding::Perturb(x) => self.perturbed(line, input, x),
            Finding::Scan(x) => self.scanned(line, input, x),
            Finding::Decompose(x) => self.decomposed(line, input, x),
            Finding::Structures(x) => {
                let _ = writeln!(self.out, "line {line}: {}", abbreviate(input, INPUT_WIDTH));
                for l in super::structures_lines(x) {
                    let _ = writeln!(self.out, "  {l}");
                }
            }
            Finding::Failed(x) => self.failed(line, input, x),
        }
        if let Some(mark) = s.slip {
            let text = match mark {
                SlipMark::Caught => "marked `slip`: refuted, as marked; the slip is caught",
                SlipMark::Holds => {
                    "marked `slip`, but it holds: nothing is caught (remove `slip` if it is right)"
                }
                SlipMark::Open => {
                    "marked `slip`, but it was neither proved nor refuted (a limit stopped the search, or the remainder is undecided): nothing is caught"
                }
            };
            let _ = writeln!(self.out, "  {text}");
        }
    }

    fn simplified(&mut self, line: usize, input: &str, s: &Simplification) {
        let _ = writeln!(self.out, "line {line}: simplify {input}");
        let _ = writeln!(self.out, "  = {}", self.layout(&s.result, "    "));
        if !s.away_from.is_empty() {
            let _ = writeln!(
                self.out,
                "  (holds where {}: there, derivatives of explicit functions were taken pointwise)",
                self.coincidences(&s.away_from)
            );
        }
        if let crate::egraph::Stop::Uncovered(why) = &s.search.stop {
            let _ = writeln!(self.out, "  note: {why}");
        }
        let _ = writeln!(self.out, "  [{}]", stats(&s.search));
    }

    fn expected(&mut self, line: usize, input: &str, e: &Expectation) {
        self.verdict(line, "expected result", input, &e.check);
    }

    fn claim(&mut self, line: usize, input: &str, c: &ClaimCheck) {
        self.verdict(line, "claim", input, &c.check);
    }

    /// The verdict on a claim or an expected result.
    fn verdict(&mut self, line: usize, what: &str, input: &str, c: &Check) {
        let input = abbreviate(input, INPUT_WIDTH);
        match c.status {
            Status::ProvedAway => {
                let _ = writeln!(
                    self.out,
                    "line {line}: {what} proved away from coincident points: {input}"
                );
                let _ = writeln!(
                    self.out,
                    "  it holds where {}; there, derivatives of explicit functions were taken \
                     pointwise and the contact terms are not fixed",
                    self.coincidences(&c.away_from)
                );
                if !c.remainder.is_zero() {
                    let _ = writeln!(
                        self.out,
                        "  the two sides differ by contact terms there:\n    {}",
                        self.layout(&c.remainder, "    ")
                    );
                }
            }
            Status::NotProved | Status::Unknown => {
                let status = if c.status == Status::NotProved {
                    "NOT PROVED"
                } else {
                    "UNKNOWN"
                };
                let _ = writeln!(self.out, "line {line}: {what} {status}: {input}");
                if c.search.stop.is_normaliser_limit() {
                    let _ = writeln!(
                        self.out,
                        "  left side minus right side, not normalised:\n    {}",
                        self.layout_capped(&c.remainder, "    ", REMAINDER_TERMS)
                    );
                } else {
                    let _ = writeln!(
                        self.out,
                        "  left side minus right side simplifies to:\n    {}",
                        self.layout(&c.remainder, "    ")
                    );
                }
                let reason = if c.search.stop.is_saturated() {
                    "the rules saturated: nothing more applies, so the two sides differ by the remainder above".to_string()
                } else if let crate::egraph::Stop::Uncovered(why) = &c.search.stop {
                    format!("the rules saturated, but {why}; so the claim is neither proved nor refuted")
                } else if let crate::egraph::Stop::Undecided(why) = &c.search.stop {
                    format!("the rules saturated, but {why}; so the claim is neither proved nor refuted")
                } else {
                    format!(
                        "{} {}; the remainder is not final, so the claim is neither proved nor refuted",
                        stopper(&c.search.stop),
                        c.search.stop.describe()
                    )
                };
                let _ = writeln!(self.out, "  stop reason: {reason}");
            }
            Status::Proved | Status::Confirmed => {
                let _ = writeln!(self.out, "line {line}: {what} proved: {input}");
            }
        }
        let _ = writeln!(self.out, "  [{}]", stats(&c.search));
    }

    fn classified(&mut self, line: usize, c: &Classification) {
        let (name, family) = (&c.generator, &c.family);
        if c.preserved {
            let _ = writeln!(
                self.out,
                "line {line}: {name} ({family}) is preserved: {name}[n] = 0 on the boundary"
            );
        } else {
            let _ = writeln!(
                self.out,
                "line {line}: {name} ({family}) is broken: on the boundary {name}[n] = {}",
                self.print(&c.normal_component)
            );
        }
    }

    /// A slip as a sentence.
    fn slip(&self, s: &Slip) -> String {
        match s {
            Slip::Sign => "off by a sign: this step is minus the one before".into(),
            Slip::Factor { ratio } => format!(
                "off by a constant factor: the step before is {} times this one",
                self.print(ratio)
            ),
            Slip::Contact { at, change } => {
                let what = match change {
                    Change::Missing => "is missing from this step",
                    Change::Extra => "is extra in this step",
                    Change::Coefficient => "has a different coefficient in this step",
                };
                format!("the contact term at `{at}` {what}")
            }
            Slip::Term { term, change } => {
                let shown = match term {
                    None => "the constant term".to_string(),
                    Some(t) => format!("the term with {}", self.print(t)),
                };
                match change {
                    TermChange::Missing => format!("{shown} is missing from this step"),
                    TermChange::Extra => format!("{shown} is extra in this step"),
                    TermChange::Coefficient { before, after } => format!(
                        "{shown} has a wrong coefficient: {} in the step before, {} in this step",
                        self.print(before),
                        self.print(after)
                    ),
                }
            }
            Slip::ContactTerms => "the contact terms at the coincident points differ".into(),
            Slip::Remainder => "the two steps differ by the remainder shown".into(),
        }
    }

    /// A derivation step by step.
    fn derivation(&mut self, line: usize, d: &Derivation) {
        let _ = writeln!(self.out, "line {line}: derivation {}", d.name);
        let mut holding = 0;
        for step in &d.steps {
            let claimed = if step.cited.is_empty() {
                String::new()
            } else {
                format!(" (cited: {})", step.cited.join(", "))
            };
            let (k, at) = (step.step, step.line);
            match step.status {
                Status::Proved | Status::ProvedAway => {
                    holding += 1;
                    let mut by = if step.rules.is_empty() {
                        "normalisation".to_string()
                    } else {
                        step.rules.join(", ")
                    };
                    if !step.unused_citations.is_empty() {
                        by = format!(
                            "{by}; cited but not used: {}",
                            step.unused_citations.join(", ")
                        );
                    }
                    if step.in_model {
                        by = format!("{by}, with the model's correlators in place");
                    }
                    if let Some(contact) = &step.unchecked_contact {
                        by = format!(
                            "{by}; there the steps differ by contact terms that nothing checked: {}",
                            self.print(contact)
                        );
                    }
                    if step.away_from.is_empty() {
                        let _ =
                            writeln!(self.out, "  step {k} (line {at}): proved by {by}{claimed}");
                    } else {
                        let _ = writeln!(
                            self.out,
                            "  step {k} (line {at}): proved away from coincident points ({}) by {by}{claimed}",
                            self.coincidences(&step.away_from)
                        );
                    }
                }
                Status::NotProved | Status::Unknown => {
                    let why = match (&step.slip, &step.stop) {
                        (Some(slip), _) => format!("NOT PROVED: {}", self.slip(slip)),
                        (None, Some(stop)) => {
                            format!("UNKNOWN: {} {}", stopper(stop), stop.describe())
                        }
                        (None, None) => "UNKNOWN".into(),
                    };
                    let _ = writeln!(self.out, "  step {k} (line {at}): {why}{claimed}");
                    if let Some(r) = &step.remainder {
                        let _ = writeln!(
                            self.out,
                            "    step before minus this step: {}",
                            self.layout_capped(r, "      ", REMAINDER_TERMS)
                        );
                    }
                }
                Status::Confirmed => {
                    holding += 1;
                    let _ = writeln!(
                        self.out,
                        "  step {k} (line {at}): confirmed numerically on {} configuration(s) of the model, not by the rules{claimed}",
                        step.samples.unwrap_or(0)
                    );
                }
            }
            let note = step.numeric.as_ref().map(step_numeric);
            if step.proved_away_first {
                let _ = writeln!(
                    self.out,
                    "    numerically: proved away from coincident points; {}",
                    note.unwrap_or_default()
                );
            } else if let Some(note) = note {
                let _ = writeln!(self.out, "    numerically: {note}");
            }
        }
        let _ = writeln!(self.out, "  {holding} of {} steps hold", d.steps.len());
    }

    /// `line N: evaluate` with one value per component.
    fn evaluated(&mut self, line: usize, input: &str, e: &Evaluated) {
        let _ = writeln!(
            self.out,
            "line {line}: evaluate {}",
            abbreviate(input, INPUT_WIDTH)
        );
        for c in &e.components {
            let _ = writeln!(self.out, "  {}{}", components(&c.index), number(&c.value));
        }
    }

    /// `line N: solve` with the value found, exact when the algebra
    /// settled it.
    fn solved(&mut self, line: usize, input: &str, s: &Solved) {
        let unknown = &s.unknown;
        let _ = writeln!(
            self.out,
            "line {line}: solve {}",
            abbreviate(input, INPUT_WIDTH)
        );
        if let Some(e) = &s.exact {
            let away = if s.exact_away_from.is_empty() {
                String::new()
            } else {
                format!(
                    " (the equation then holds where {})",
                    self.coincidences(&s.exact_away_from)
                )
            };
            let _ = writeln!(
                self.out,
                "  {unknown} = {}  exactly, for every value of the other parameters{away}",
                self.print(e)
            );
        }
        let from = if s.component.0.is_empty() {
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

    /// `line N: flux` insertion by insertion.
    fn flux(&mut self, line: usize, input: &str, f: &FluxChecked) {
        let verdict = match &f.verdict {
            Agreement::Agree => "holds",
            Agreement::Disagree => "FAILS",
            Agreement::Unknown(_) => "UNKNOWN",
        };
        let _ = writeln!(
            self.out,
            "line {line}: flux {verdict}: {}",
            abbreviate(input, INPUT_WIDTH)
        );
        for check in &f.around {
            let _ = writeln!(
                self.out,
                "  around {}: {}",
                check.point,
                match &check.verdict {
                    Agreement::Agree => "flux = contact terms".to_string(),
                    Agreement::Disagree => "flux ≠ contact terms  ← disagree".to_string(),
                    Agreement::Unknown(why) => format!("unknown: {why}"),
                }
            );
            for c in &check.components {
                let _ = writeln!(
                    self.out,
                    "    {}flux {}, contact {}",
                    components(&c.index),
                    number(&c.flux),
                    number(&c.contact)
                );
            }
        }
        for c in &f.away {
            let at: Vec<String> = c.at.iter().map(|x| format!("{x:.3}")).collect();
            let _ = writeln!(
                self.out,
                "  away from insertions, at ({}): |divergence| {:.1e} against |current|/r {:.1e}{}",
                at.join(", "),
                c.divergence.value.abs(),
                c.scale,
                match &c.verdict {
                    Agreement::Agree => String::new(),
                    Agreement::Disagree => "  ← not conserved".to_string(),
                    Agreement::Unknown(why) => format!("  ← unknown: {why}"),
                }
            );
        }
    }

    /// `line N: perturb` with each order's correction, the divergences
    /// separated at second order, the sum, and each `expect`.
    fn perturbed(&mut self, line: usize, input: &str, p: &Perturbed) {
        let verdict = match &p.verdict {
            None => "",
            Some(Agreement::Agree) => " agree",
            Some(Agreement::Disagree) => " DISAGREE",
            Some(Agreement::Unknown(_)) => " UNKNOWN",
        };
        let _ = writeln!(
            self.out,
            "line {line}: perturb{verdict}: {}",
            abbreviate(input, INPUT_WIDTH)
        );
        for o in &p.orders {
            let what = match o.order {
                0 => "order 0 (unperturbed)".to_string(),
                1 => "order g (finite)".to_string(),
                n => format!("order g^{n} (finite part)"),
            };
            let _ = writeln!(
                self.out,
                "  {what}: {} [{:.2} s]",
                number(&o.value),
                o.seconds
            );
            if let Some(log) = &o.log {
                let _ = writeln!(
                    self.out,
                    "    coefficient of ln(1/ε) (|z - z'| > ε): {}",
                    number(log)
                );
            }
            for d in &o.powers {
                let coefficient = if d.converged {
                    number(&d.coefficient)
                } else {
                    "a wall integral that does not converge (it diverges at large distances)"
                        .to_string()
                };
                let _ = writeln!(
                    self.out,
                    "    power divergence dropped (a boundary counterterm): ε^({}) × {coefficient}",
                    d.exponent,
                );
            }
        }
        let _ = writeln!(
            self.out,
            "  total at coupling {}: {}",
            p.coupling,
            number(&p.total)
        );
        for e in &p.expects {
            let which = match e.order {
                Some(k) => format!("order {k}"),
                None => "total".to_string(),
            };
            let _ = writeln!(
                self.out,
                "  expect {which}: computed {}, expected {}, relative difference {:.1e}{}",
                number(&e.computed),
                number(&e.expected),
                e.relative_difference,
                match &e.verdict {
                    Agreement::Agree => String::new(),
                    Agreement::Disagree => "  ← disagree".into(),
                    Agreement::Unknown(why) => format!("  ← unknown: {why}"),
                }
            );
        }
    }

    /// `line N: compare` with both sides per component.
    fn compared(&mut self, line: usize, input: &str, c: &Compared) {
        let verdict = match &c.verdict {
            Agreement::Agree => "agree",
            Agreement::Disagree => "DISAGREE",
            Agreement::Unknown(_) => "UNKNOWN",
        };
        let _ = writeln!(
            self.out,
            "line {line}: compare {verdict}: {}",
            abbreviate(input, INPUT_WIDTH)
        );
        for k in &c.components {
            let _ = writeln!(
                self.out,
                "  {}left {}, right {}, relative difference {:.1e}{}",
                components(&k.index),
                number(&k.left),
                number(&k.right),
                k.relative_difference,
                match &k.verdict {
                    Agreement::Agree => String::new(),
                    Agreement::Disagree => "  ← disagree".into(),
                    Agreement::Unknown(why) => format!("  ← unknown: {why}"),
                }
            );
        }
    }

    /// `line N: scan` with its table (every row up to 21, else 21 evenly
    /// spaced rows; both sides and their relative difference) and where the
    /// files went.
    fn scanned(&mut self, line: usize, input: &str, scan: &Scanned) {
        let verdict = match &scan.verdict {
            Agreement::Agree => "agree",
            Agreement::Disagree => "DISAGREE",
            Agreement::Unknown(_) => "UNKNOWN",
        };
        let _ = writeln!(
            self.out,
            "line {line}: scan {verdict}: {}",
            abbreviate(input, INPUT_WIDTH)
        );
        let n = scan.rows.len();
        if n > 0 {
            let _ = writeln!(
                self.out,
                "  columns: {}, then left side | right side | relative difference",
                scan.param
            );
        }
        let shown: Vec<usize> = if n <= 21 {
            (0..n).collect()
        } else {
            (0..21).map(|k| k * (n - 1) / 20).collect()
        };
        for k in shown {
            let row = &scan.rows[k];
            let pairs: Vec<String> = row
                .left
                .iter()
                .zip(&row.right)
                .zip(&scan.labels)
                .zip(row.relative_difference.iter().zip(&row.verdicts))
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
            let _ = writeln!(
                self.out,
                "  {} = {:.6}: {}",
                scan.param,
                row.x,
                pairs.join(";  ")
            );
        }
        if let Some(first) = &scan.first {
            let why = match &first.verdict {
                Agreement::Unknown(why) => format!("not known: {why}"),
                _ => "the two sides differ".to_string(),
            };
            let _ = writeln!(
                self.out,
                "  first at {} = {:.6}: {why}",
                scan.param, first.x
            );
        }
        if !scan.written.is_empty() {
            let _ = writeln!(self.out, "  written: {}", scan.written.join(", "));
        }
    }

    /// `line N: decompose` with the coefficients (exact fractions where
    /// they fit one), the residual and where the files went.
    fn decomposed(&mut self, line: usize, input: &str, d: &Decomposed) {
        use crate::syntax::ast::Channel;
        let found = &d.fit;
        let (channel, name, coefficient) = match found.channel {
            Channel::Bulk => ("bulk", "Δ", "λa"),
            Channel::Boundary => ("boundary", "Δ̂", "μ²"),
            Channel::SChannel => ("s", "Δ", "λ²"),
        };
        let _ = writeln!(
            self.out,
            "line {line}: decompose {}",
            abbreviate(input, INPUT_WIDTH)
        );
        use crate::numeric::decompose::Method;
        if found.method == Method::Series {
            let _ = writeln!(
                self.out,
                "  {channel} channel{}: {} block{} solved order by order in the series about the channel's limit (exact), {} unmatched term{}, checked at {} {} in [{}, {}]",
                if found.channel == Channel::SChannel {
                    String::new()
                } else {
                    format!(", Δ = {}", found.delta)
                },
                found.dims.len(),
                if found.dims.len() == 1 { "" } else { "s" },
                found.unmatched,
                if found.unmatched == 1 { "" } else { "s" },
                found.checked_at,
                match found.channel {
                    Channel::SChannel => "configurations, |z|",
                    _ => "values of ξ",
                },
                found.range.0,
                found.range.1,
            );
        } else if found.channel == Channel::SChannel {
            let _ = writeln!(
                self.out,
                "  s-channel: {} block{} fitted at {} configurations, |z| in [{}, {}], checked at {} others",
                found.dims.len(),
                if found.dims.len() == 1 { "" } else { "s" },
                found.fitted_at,
                found.range.0,
                found.range.1,
                found.checked_at
            );
        } else {
            let _ = writeln!(
            self.out,
            "  {channel} channel, Δ = {}{}: {} block{} fitted at {} values of {} in [{}, {}], checked at {} others",
            found.delta,
            found.delta12.map_or(String::new(), |x| format!(", Δ̂1 - Δ̂2 = {x}")),
            found.dims.len(),
            if found.dims.len() == 1 { "" } else { "s" },
            found.fitted_at,
            if found.delta12.is_some() { "χ" } else { "ξ" },
            found.range.0,
            found.range.1,
            found.checked_at
        );
        }
        let coefficients = super::coefficients(found);
        // The series solve's exact fraction where it has one: `525/8192`,
        // not a decimal that no small fraction fits.
        let shift = usize::from(coefficients.identity.is_some());
        let text = |k: usize, c: &super::Coefficient| match found.exact.get(k) {
            Some(e) if e == "0" => "0 (exactly)".to_string(),
            Some(e) if e.len() <= 24 => format!("{e} ({:.12e})", c.value),
            _ => coefficient_text(c),
        };
        if let Some(c) = &coefficients.identity {
            let _ = writeln!(self.out, "  identity: {}", text(0, c));
        }
        for (k, (dim, c)) in found.dims.iter().zip(&coefficients.blocks).enumerate() {
            let spin = found
                .spins
                .get(k)
                .map_or(String::new(), |l| format!(", ℓ = {l}"));
            let _ = writeln!(
                self.out,
                "  {name} = {dim}{spin}: {coefficient} = {}{}",
                text(k + shift, c),
                relative_text(c)
            );
        }
        let _ = writeln!(
            self.out,
            "  {}: largest difference {:.1e} of the largest |G|",
            if d.holds {
                "the expansion holds"
            } else {
                "NOT an expansion in these blocks"
            },
            found.residual
        );
        if !d.written.is_empty() {
            let _ = writeln!(self.out, "  written: {}", d.written.join(", "));
        }
    }

    /// `line N: <statement> UNKNOWN` for a numeric statement that could not
    /// be carried out.
    fn failed(&mut self, line: usize, input: &str, f: &Failure) {
        let _ = writeln!(
            self.out,
            "line {line}: {} UNKNOWN: {}",
            f.statement,
            abbreviate(input, INPUT_WIDTH)
        );
        for (k, text) in f.reason.lines().enumerate() {
            let head = if k == 0 { "numerically: " } else { "  " };
            let _ = writeln!(self.out, "  {head}{text}");
        }
    }
}

/// What stopped: the e-graph, or the engine's outer loop.
fn stopper(stop: &crate::egraph::Stop) -> &'static str {
    match stop {
        crate::egraph::Stop::RoundLimit(_) => "the engine",
        crate::egraph::Stop::TermLimit(_) | crate::egraph::Stop::ContractionLimit(_) => {
            "the normaliser"
        }
        _ => "the e-graph",
    }
}

/// A coefficient of a block expansion with its uncertainty.
fn coefficient_text(c: &super::Coefficient) -> String {
    use super::Shape;
    let v = c.value;
    match c.shape {
        // An exact series solve gives 0 with no uncertainty at all.
        Shape::Zero if v == 0.0 && c.spread == 0.0 => "0 (exactly)".to_string(),
        Shape::Zero => format!("0 (|{v:.1e}| within its uncertainty {:.1e})", c.spread),
        Shape::Undetermined => format!(
            "{v:.6e} (not determined: moves by {:.1e} with the range)",
            c.spread
        ),
        Shape::Fraction(p, 1) => format!("{p} ({v:.12e})"),
        Shape::Fraction(p, q) => format!("{p}/{q} ({v:.12e})"),
        Shape::Exact => format!("{v:.12e}"),
        Shape::Uncertain => format!("{v:.12e} ± {:.1e}", c.spread),
    }
}

/// ` = 1/2 × the identity's`, in units of the identity's coefficient.
fn relative_text(c: &super::Coefficient) -> String {
    if c.value == 0.0 {
        return String::new();
    }
    match c.relative {
        None => String::new(),
        Some((_, Some((p, 1)))) => format!(" = {p} × the identity's"),
        Some((_, Some((p, q)))) => format!(" = {p}/{q} × the identity's"),
        Some((r, None)) => format!(" = {r:.10e} × the identity's"),
    }
}

/// What the model said about a step, as a sentence.
fn step_numeric(n: &StepNumeric) -> String {
    match n {
        StepNumeric::NotEvaluated { reason } => format!("not evaluated on the model: {reason}"),
        StepNumeric::Undecided {
            configuration,
            reason,
        } => format!("not decided on the model at configuration {configuration}: {reason}"),
        StepNumeric::Differs {
            at,
            before,
            after,
            ratio,
        } => {
            let mut note = format!(
                "they differ at {}: {:.9e} in the step before, {:.9e} in this step",
                points(at),
                before.unwrap_or(f64::NAN),
                after.unwrap_or(f64::NAN)
            );
            if let Some(r) = ratio {
                let exact = match r.fraction {
                    Some((p, 1)) => format!(" = {p}"),
                    Some((p, q)) => format!(" = {p}/{q}"),
                    None => String::new(),
                };
                note.push_str(&format!(
                    "; at every configuration the step before is {:.9}{exact} times this one",
                    r.value
                ));
            }
            note
        }
        StepNumeric::FluxNotChecked {
            configuration: None,
            reason,
            ..
        } => format!("not checked by flux on the model: {reason}"),
        StepNumeric::FluxNotChecked {
            configuration: Some(k),
            around: Some(p),
            reason,
        } => format!("not checked by flux on the model: around {p} at configuration {k}, {reason}"),
        StepNumeric::FluxNotChecked {
            configuration: Some(k),
            around: None,
            reason,
        } => format!("not checked by flux on the model at configuration {k}: {reason}"),
        StepNumeric::FluxDiffers {
            configuration,
            around,
            radius,
            flux,
            contact,
        } => {
            let pair = match (flux, contact) {
                (Some(f), Some(c)) => format!(": flux {f:.9e}, contact terms {c:.9e}"),
                _ => String::new(),
            };
            format!(
                "by flux at configuration {configuration}: around {around} the flux through the sphere of radius {radius} \
                 differs from the contact terms there{pair}"
            )
        }
        StepNumeric::NotConserved {
            configuration,
            divergence,
        } => format!(
            "by flux at configuration {configuration}: the divergence is {divergence:.3e} away from the insertions, \
             not 0"
        ),
        StepNumeric::FluxConfirmed => "by flux: around each insertion the flux equals the contact terms, and away from them the \
         divergence vanishes"
            .into(),
    }
}
