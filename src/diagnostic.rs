//! Typed errors for everything a user can get wrong, rendered the way rustc
//! prints them: `error: …`, ` --> file:line:col`, the source line and a caret.
//!
//! Every stage returns [`Error`]; only `main` renders it. Rendering goes
//! through `codespan-reporting` so the layout is a well-kept crate's, not ours.

use std::fmt;
use std::sync::Arc;

use codespan_reporting::diagnostic::{Diagnostic, Label};
use codespan_reporting::files::SimpleFile;
use codespan_reporting::term::{self, termcolor::Buffer, Chars, Config};

use crate::syntax::ast::Span;

/// One input text with the name it is reported under.
#[derive(Debug, PartialEq, Eq)]
pub struct Source {
    pub name: String,
    pub text: String,
    /// Byte offset of the start of every line, indexed once so that a
    /// position costs a binary search, not a scan from the start of the file.
    line_starts: Vec<usize>,
}

impl Source {
    pub fn new(name: impl Into<String>, text: impl Into<String>) -> Arc<Source> {
        let text = text.into();
        let line_starts = std::iter::once(0)
            .chain(text.match_indices('\n').map(|(i, _)| i + 1))
            .collect();
        Arc::new(Source {
            name: name.into(),
            text,
            line_starts,
        })
    }

    /// 1-based line of a byte offset.
    pub fn line(&self, offset: usize) -> usize {
        self.line_starts.partition_point(|&s| s <= offset)
    }

    /// 1-based line and column (in characters) of a byte offset.
    pub fn line_col(&self, offset: usize) -> (usize, usize) {
        let mut offset = offset.min(self.text.len());
        while !self.text.is_char_boundary(offset) {
            offset -= 1;
        }
        // The last line starting at or before the offset.
        let line = self.line_starts.partition_point(|&s| s <= offset);
        let line_start = self.line_starts[line - 1];
        let col = self.text[line_start..offset].chars().count() + 1;
        (line, col)
    }
}

/// What kind of mistake an [`Error`] reports.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ErrorKind {
    /// The text does not follow the grammar.
    Syntax,
    /// A name is used before (or without) its declaration, or declared twice.
    Name,
    /// Free indices do not balance, or an index appears three times.
    Index,
    /// An operator or point is used where it cannot stand (D at a bulk point,
    /// a boundary operator without a boundary, …).
    Placement,
    /// Exact arithmetic failed (division by zero, 0 to a negative power).
    Arithmetic,
    /// A rule file is malformed or refers to unbound variables.
    Rule,
    /// A file could not be read.
    Io,
    /// An expression is outside what the engine handles (a power of a
    /// correlator, …).
    Unsupported,
    /// The input asks for more than a budget allows (nesting depth, number
    /// of terms, size of a number or of a file; see `budget`).
    Limit,
    /// A term cannot be evaluated numerically: something is left
    /// unevaluated, a value is missing, or the arithmetic has no real value
    /// (division by zero, a non-integer power of a negative number).
    Numeric,
}

impl ErrorKind {
    /// The word in `error[…]`.
    pub fn code(self) -> &'static str {
        match self {
            ErrorKind::Syntax => "syntax",
            ErrorKind::Name => "name",
            ErrorKind::Index => "index",
            ErrorKind::Placement => "placement",
            ErrorKind::Arithmetic => "arithmetic",
            ErrorKind::Rule => "rule",
            ErrorKind::Io => "io",
            ErrorKind::Limit => "limit",
            ErrorKind::Unsupported => "unsupported",
            ErrorKind::Numeric => "numeric",
        }
    }
}

/// A user-facing error with its location.
#[derive(Debug)]
pub struct Error {
    pub kind: ErrorKind,
    pub message: String,
    /// Where it happened, if anywhere in a source text.
    pub at: Option<(Arc<Source>, Span)>,
    /// The text under the caret.
    pub label: String,
    /// Further lines (`= note: …`).
    pub notes: Vec<String>,
    /// Other places in the same source, each with its label (where an
    /// unclosed bracket ran into the next statement, say). A boxed slice,
    /// not a `Vec`, to keep `Error` small: every `Result` carries it.
    pub secondary: Box<[(Span, String)]>,
}

impl Error {
    pub fn new(kind: ErrorKind, message: impl Into<String>) -> Error {
        Error {
            kind,
            message: message.into(),
            at: None,
            label: String::new(),
            notes: Vec::new(),
            secondary: Box::new([]),
        }
    }

    /// An error located in `source` at `span`.
    pub fn at(
        kind: ErrorKind,
        source: &Arc<Source>,
        span: Span,
        message: impl Into<String>,
    ) -> Error {
        Error::new(kind, message).with_span(source, span)
    }

    pub fn with_span(mut self, source: &Arc<Source>, span: Span) -> Error {
        self.at = Some((source.clone(), span));
        self
    }

    pub fn with_label(mut self, label: impl Into<String>) -> Error {
        self.label = label.into();
        self
    }

    /// Another place in the same source, underlined with `label`.
    pub fn with_secondary(mut self, span: Span, label: impl Into<String>) -> Error {
        let mut all = std::mem::take(&mut self.secondary).into_vec();
        all.push((span, label.into()));
        self.secondary = all.into_boxed_slice();
        self
    }

    pub fn with_note(mut self, note: impl Into<String>) -> Error {
        self.notes.push(note.into());
        self
    }

    /// The rendered diagnostic, without colour.
    pub fn render(&self) -> String {
        let mut buffer = Buffer::no_color();
        self.emit(&mut buffer);
        String::from_utf8_lossy(buffer.as_slice()).into_owned()
    }

    /// The rendered diagnostic, coloured when `color` is true.
    pub fn render_to(&self, color: bool) -> Vec<u8> {
        let mut buffer = if color {
            Buffer::ansi()
        } else {
            Buffer::no_color()
        };
        self.emit(&mut buffer);
        buffer.into_inner()
    }

    fn emit(&self, buffer: &mut Buffer) {
        // rustc's layout: ` --> file:line:col` and `|` borders, not box
        // drawing, so the location reads the same in every terminal.
        let config = Config {
            chars: Chars::ascii(),
            ..Config::default()
        };
        // Control characters from the input (terminal escapes in a file
        // name, a comment or a path) are shown escaped, never raw.
        let escape = |s: &str| crate::charset::escape_controls(s).into_owned();
        let mut diagnostic = Diagnostic::error()
            .with_message(escape(&self.message))
            .with_code(self.kind.code())
            .with_notes(self.notes.iter().map(|n| escape(n)).collect());
        let file = match &self.at {
            Some((source, span)) => {
                let end = span.end.min(source.text.len());
                let mut ranges = vec![span.start.min(end), end];
                // Every position is mapped in one call: escaping shifts them.
                for (other, _) in self.secondary.iter() {
                    let end = other.end.min(source.text.len());
                    ranges.extend([other.start.min(end), end]);
                }
                let text = crate::charset::escape_controls_at(&source.text, &mut ranges);
                let mut labels = vec![
                    Label::primary((), ranges[0]..ranges[1]).with_message(escape(&self.label))
                ];
                for (k, (_, label)) in self.secondary.iter().enumerate() {
                    let (a, b) = (ranges[2 + 2 * k], ranges[3 + 2 * k]);
                    labels.push(Label::secondary((), a..b).with_message(escape(label)));
                }
                diagnostic = diagnostic.with_labels(labels);
                SimpleFile::new(escape(&source.name), text.into_owned())
            }
            None => SimpleFile::new(String::new(), String::new()),
        };
        // Rendering into memory cannot fail for in-range spans; if it ever
        // does, fall back to the plain message rather than lose the error.
        if term::emit(buffer, &config, &file, &diagnostic).is_err() {
            use std::io::Write;
            let _ = writeln!(
                buffer,
                "error[{}]: {}",
                self.kind.code(),
                escape(&self.message)
            );
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.at {
            Some((source, span)) => {
                let (line, col) = source.line_col(span.start);
                write!(f, "{}:{}:{}: {}", source.name, line, col, self.message)
            }
            None => write!(f, "{}", self.message),
        }
    }
}

impl std::error::Error for Error {}

pub type Result<T> = std::result::Result<T, Error>;

#[cfg(test)]
mod tests {
    use super::Source;

    #[test]
    fn line_and_column_come_from_the_line_index() {
        let s = Source::new("f", "ab\nδx\n\nz");
        assert_eq!(s.line_col(0), (1, 1));
        assert_eq!(s.line_col(2), (1, 3));
        assert_eq!(s.line_col(3), (2, 1));
        // Columns count characters: δ is two bytes, one column.
        assert_eq!(s.line_col(5), (2, 2));
        // Inside a character: the character's own column.
        assert_eq!(s.line_col(4), (2, 1));
        assert_eq!(s.line_col(7), (3, 1));
        assert_eq!(s.line_col(8), (4, 1));
        // Past the end: the end.
        assert_eq!(s.line_col(100), (4, 2));
        assert_eq!(s.line(8), 4);
        assert_eq!(Source::new("e", "").line_col(0), (1, 1));
    }
}
