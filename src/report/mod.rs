//! Renderers: pure functions of an outcome ([`crate::outcome`]) to text
//! (Unicode or ASCII, [`text`]), LaTeX ([`latex`]) or JSON (serde, the
//! schema in `docs/report.schema.json`). Only the form asked for is built.

pub mod latex;
pub mod text;

use serde::Serialize;

use crate::diagnostic::Error;
use crate::numeric::decompose::Decomposition;
use crate::outcome::FileOutcome;
use crate::term::print::Style;

/// The form of a report.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Format {
    #[default]
    Unicode,
    Ascii,
    Latex,
    Json,
}

impl Format {
    /// The format of a printing style (`Style::Latex` → LaTeX).
    pub fn of_style(style: Style) -> Format {
        match style {
            Style::Unicode => Format::Unicode,
            Style::Ascii => Format::Ascii,
            Style::Latex => Format::Latex,
        }
    }
}

/// A file's report in one form.
pub fn render(o: &FileOutcome, format: Format) -> String {
    match format {
        Format::Unicode => text::render(o, Style::Unicode),
        Format::Ascii => text::render(o, Style::Ascii),
        Format::Latex => latex::render(o),
        Format::Json => json(o),
    }
}

/// The outcome as one JSON document (pretty-printed, ending in a new
/// line).
pub fn json<T: Serialize + ?Sized>(value: &T) -> String {
    // Serialising plain data with string keys cannot fail.
    let mut out = serde_json::to_string_pretty(value).unwrap_or_else(|e| {
        format!("{{\"error\": {{\"kind\": \"io\", \"message\": \"cannot write JSON: {e}\"}}}}")
    });
    out.push('\n');
    out
}

/// An input error as JSON: where it is and what was expected, and the
/// diagnostic as the command line renders it.
#[derive(Clone, Debug, Serialize)]
pub struct InputError {
    /// `syntax`, `name`, `index`, `placement`, `arithmetic`, `rule`, `io`,
    /// `unsupported`, `limit` or `numeric`.
    pub kind: &'static str,
    pub message: String,
    /// The file, line and column (from 1, in characters), when the error
    /// is at a place in a source.
    pub file: Option<String>,
    pub line: Option<usize>,
    pub column: Option<usize>,
    /// The text under the caret.
    pub label: String,
    pub notes: Vec<String>,
    /// The whole diagnostic as text.
    pub rendered: String,
}

impl InputError {
    pub fn of(e: &Error) -> InputError {
        let (file, line, column) = match &e.at {
            Some((source, span)) => {
                let (l, c) = source.line_col(span.start);
                (Some(source.name.clone()), Some(l), Some(c))
            }
            None => (None, None, None),
        };
        InputError {
            kind: e.kind.code(),
            message: e.message.clone(),
            file,
            line,
            column,
            label: e.label.clone(),
            notes: e.notes.clone(),
            rendered: e.render(),
        }
    }
}

/// The JSON document for a file whose input is wrong (exit code 2).
pub fn error_json(e: &Error) -> String {
    #[derive(Serialize)]
    struct Doc {
        error: InputError,
        exit_code: i32,
    }
    json(&Doc {
        error: InputError::of(e),
        exit_code: 2,
    })
}

/// How a fitted coefficient reads: what the fit determines of it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) enum Shape {
    /// 0 within its uncertainty.
    Zero,
    /// Moves by more than 1e-3 of itself with the range.
    Undetermined,
    /// A fraction p/q with a small denominator, determined to 1e-11.
    Fraction(i64, i64),
    /// Determined to 1e-12 and no such fraction.
    Exact,
    /// A value and its uncertainty.
    Uncertain,
}

/// One coefficient of a block expansion as a report shows it.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Coefficient {
    pub value: f64,
    pub spread: f64,
    pub shape: Shape,
    /// In units of the identity's coefficient, with its fraction if one
    /// fits to 1e-11 (bulk channel only).
    pub relative: Option<(f64, Option<(i64, i64)>)>,
}

/// The identity's and the blocks' coefficients of a fit.
pub(crate) struct Coefficients {
    pub identity: Option<Coefficient>,
    pub blocks: Vec<Coefficient>,
}

/// Reads the coefficients of a fit: a fraction only when it is determined
/// far better than the fraction's own precision.
pub(crate) fn coefficients(found: &Decomposition) -> Coefficients {
    let largest = found
        .coefficients
        .iter()
        .chain(found.identity.iter())
        .fold(0.0f64, |m, c| m.max(c.abs()));
    let shape = |v: f64, spread: f64| {
        let scale = v.abs().max(1e-300);
        if spread <= 1e-6 * largest && v.abs() <= 3.0 * spread + 1e-12 * largest {
            return Shape::Zero;
        }
        if spread > 1e-3 * scale {
            return Shape::Undetermined;
        }
        let fraction = if spread <= 1e-11 * scale {
            crate::check::small_fraction(v)
                .filter(|(p, q)| ((*p as f64 / *q as f64) - v).abs() <= 1e-11 * scale)
        } else {
            None
        };
        match fraction {
            Some((p, q)) => Shape::Fraction(p, q),
            None if spread <= 1e-12 * scale => Shape::Exact,
            None => Shape::Uncertain,
        }
    };
    let relative = |v: f64| match found.identity {
        Some(c) if c != 0.0 => {
            let r = v / c;
            let fraction = crate::check::small_fraction(r)
                .filter(|(p, q)| ((*p as f64 / *q as f64) - r).abs() <= 1e-11 * r.abs());
            Some((r, fraction))
        }
        _ => None,
    };
    let spread = |k: usize| found.spread.get(k).copied().unwrap_or(0.0);
    let shift = usize::from(found.identity.is_some());
    Coefficients {
        identity: found.identity.map(|c| Coefficient {
            value: c,
            spread: spread(0),
            shape: shape(c, spread(0)),
            relative: None,
        }),
        blocks: found
            .coefficients
            .iter()
            .enumerate()
            .map(|(k, c)| Coefficient {
                value: *c,
                spread: spread(k + shift),
                shape: shape(*c, spread(k + shift)),
                relative: relative(*c),
            })
            .collect(),
    }
}

/// The lines of a `structures` finding (or `decompose … in structures`),
/// without the statement line.
pub(crate) fn structures_lines(f: &crate::outcome::StructuresFound) -> Vec<String> {
    let l = &f.listing;
    let mut out = Vec::new();
    for c in &l.cross_ratios {
        out.push(format!("cross-ratio: {c}"));
    }
    for b in &l.blocks {
        out.push(format!("building block: {b}"));
    }
    out.push(format!("prefactor: K = {}", l.prefactor));
    let expected = match l.expected {
        Some(e) => format!("{e} expected"),
        None => "no count expected".to_string(),
    };
    out.push(format!(
        "{} structure{} ({} candidate{}, rank {} at pseudo-random configurations, singular values kept ≥ {:.1e}, dropped ≤ {:.1e} of the largest; {expected})",
        l.structures.len(),
        if l.structures.len() == 1 { "" } else { "s" },
        l.candidates,
        if l.candidates == 1 { "" } else { "s" },
        l.rank,
        l.gap.0,
        l.gap.1,
    ));
    out.push(format!("  why: {}", l.why));
    if let Some(x) = &l.exchange {
        out.push(format!("  exchange symmetry {x}"));
    }
    for (k, s) in l.structures.iter().enumerate() {
        out.push(format!("  S{} = {s}  (symmetric traceless part)", k + 1));
    }
    if !l.conservation.is_empty() {
        out.push(
            "conservation, ∂_μ Σ_i f_i K S_i = 0 (exact: rational interpolation at rational configurations, checked exactly at others):"
                .into(),
        );
        for r in &l.conservation {
            out.push(format!("  {r}"));
        }
    }
    if let Some(n) = &l.conservation_note {
        out.push(format!("conservation {n}"));
    }
    if let Some(fit) = &f.fit {
        out.push(format!(
            "decomposition: fitted at {} configurations, checked at {} others of the same η: largest relative difference {:.1e} ({})",
            fit.fitted_at,
            fit.checked_at,
            fit.residual,
            if fit.residual <= crate::numeric::structures::STRUCTURE_TOLERANCE {
                "exact"
            } else {
                "NOT exact"
            }
        ));
        let mut header = "  η".to_string();
        for k in 0..fit.structures.len() {
            header.push_str(&format!("  f{}(η)", k + 1));
        }
        out.push(header);
        let step = (fit.rows.len() / 6).max(1);
        for (eta, f, _) in fit.rows.iter().step_by(step) {
            let mut row = format!("  {eta:.4}");
            for v in f {
                row.push_str(&format!("  {v:.10e}"));
            }
            out.push(row);
        }
        if let Some((r, n)) = fit.conservation_check {
            out.push(format!(
                "conservation relations on the fitted f_i (f_i' by central differences) at {n} values of η: largest |sum| {r:.1e} of the largest term ({})",
                if r <= crate::numeric::structures::CONSERVATION_TOLERANCE {
                    "hold"
                } else {
                    "FAIL"
                }
            ));
        }
        if let Some((v, e, m)) = fit.wall_limit {
            out.push(format!(
                "wall limit, x → x∥ = p: (|s1 - s2| |p - s1| |p - s2|)^Δ-weights × K Σ f_i S_i,nn → {v:.10e} ± {e:.1e} (Richardson in y²); the model's ⟨D(p) …⟩ with the same weights {m:.10e}: {}",
                if (v - m).abs() <= (10.0 * e).max(1e-8 * m.abs()) {
                    "agree"
                } else {
                    "DISAGREE"
                }
            ));
        }
    }
    if !f.written.is_empty() {
        out.push(format!("written: {}", f.written.join(", ")));
    }
    out
}
