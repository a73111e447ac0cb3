//! The command line's input and output around the checker: reading a
//! `.ward` file and its rule files, running [`crate::check`] on it,
//! writing the files of `scan … into` and `decompose … into`, the edits of
//! `--accept`, a folder for `test`, and the report in the form asked for
//! (rendered by [`crate::report`] from the typed outcome).
//!
//! Tests drive exactly what a user runs through [`run_path`] and
//! [`run_source`]; a caller that wants the values calls [`check_path`] or
//! [`check_source`].

use std::path::{Path, PathBuf};
use std::sync::Arc;

use serde::Serialize;

use crate::check::{check_program, Progress, Settings};
use crate::diagnostic::{Error, ErrorKind, Result, Source};
use crate::egraph::Limits;
use crate::lower::{self, Program};
use crate::outcome::{FileOutcome, Finding};
use crate::report::{Format, InputError};
use crate::rules::RuleBook;
use crate::syntax;
use crate::syntax::ast::Span;
use crate::term::print::Style;

pub use crate::outcome::Mode;

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

impl Options {
    /// The form of the report.
    pub fn format(&self) -> Format {
        if self.json {
            Format::Json
        } else {
            Format::of_style(self.style)
        }
    }
}

/// The printed report and the exit code (0: all claims hold, 1: some do not).
#[derive(Clone, Debug)]
pub struct Outcome {
    pub report: String,
    pub code: i32,
    /// Under `accept`: each failing expected result's place in the source
    /// and the normal form to write there instead.
    pub edits: Vec<(Span, String)>,
    /// What the check found, as values.
    pub checked: Option<FileOutcome>,
    /// Under `accept`: how many expected results were rewritten.
    pub accepted: usize,
}

/// Reads a file from disk and runs it.
pub fn run_path(path: &Path, mode: Mode, opts: &Options) -> Result<Outcome> {
    let source = read_source(path)?;
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    run_source(&source, &base, mode, opts)
}

/// Runs a file's text as the command line does: checks it, writes its scan
/// files (unless `keep_scan_files`), and renders the report; `base` is the
/// folder its `rules "…"` and output paths are relative to.
pub fn run_source(
    source: &Arc<Source>,
    base: &Path,
    mode: Mode,
    opts: &Options,
) -> Result<Outcome> {
    let mut checked = check_source(source, base, mode, opts)?;
    if !opts.keep_scan_files {
        write_outputs(&mut checked, source, base)?;
    }
    let edits = if opts.accept {
        edits(&checked, source)
    } else {
        Vec::new()
    };
    Ok(Outcome {
        report: crate::report::render(&checked, opts.format()),
        code: checked.exit_code,
        edits,
        checked: Some(checked),
        accepted: 0,
    })
}

/// Reads and checks a file: the outcome as values, no file written.
pub fn check_path(path: &Path, mode: Mode, opts: &Options) -> Result<FileOutcome> {
    let source = read_source(path)?;
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    check_source(&source, &base, mode, opts)
}

/// Parses, lowers and checks a file's text with its rule files (relative
/// to `base`), on a thread with a large stack (see
/// [`crate::budget::MAX_DEPTH`]); progress lines go to standard error when
/// `opts.progress` is set.
pub fn check_source(
    source: &Arc<Source>,
    base: &Path,
    mode: Mode,
    opts: &Options,
) -> Result<FileOutcome> {
    crate::budget::on_checker_stack(|| {
        let program = lower::lower(source, &syntax::parse_file(source)?)?;
        let book = load_rules(&program, base, opts)?;
        let settings = Settings {
            mode,
            limits: opts.limits,
            jobs: opts.jobs,
        };
        let show = opts.progress;
        let mut progress = |p: Progress| {
            if show && (p.what == "scan" || p.total > 1) {
                eprint!("\rline {}: {} {}/{}", p.line, p.what, p.done, p.total);
                if p.done == p.total {
                    eprintln!();
                }
            }
        };
        check_program(&program, book, &settings, &mut progress)
    })
}

/// The edits of `--accept`: each expected result that does not hold,
/// replaced by the normal form found, spelt and laid out as the old one.
fn edits(checked: &FileOutcome, source: &Source) -> Vec<(Span, String)> {
    let mut out = Vec::new();
    for s in &checked.statements {
        let Finding::Expect(e) = &s.finding else {
            continue;
        };
        if let (Some(new), Some(span)) = (&e.replacement, e.expect_span) {
            let old = &source.text[span.start..span.end];
            let statement = &source.text[s.span.start..s.span.end];
            let around = [statement, source.text.as_str()];
            // The normal form in the input syntax parses back to the same
            // expression.
            out.push((
                span,
                crate::accept::in_layout_of(old, &around, |style| new.print(style)),
            ));
        }
    }
    out
}

/// Writes the CSV and SVG files of every `scan … into` and `decompose …
/// into`, and records them in the outcome.
fn write_outputs(checked: &mut FileOutcome, source: &Arc<Source>, base: &Path) -> Result<()> {
    for s in &mut checked.statements {
        let at = |e: Error| {
            if e.at.is_none() {
                e.with_span(source, s.span).with_label("in this statement")
            } else {
                e
            }
        };
        match &mut s.finding {
            Finding::Scan(scan) => {
                let Some(stem) = scan.output.clone() else {
                    continue;
                };
                // The figure fits the title to its width.
                let written = write_scan(&scan.table, base, &stem, &scan.figure).map_err(at)?;
                scan.written = written;
            }
            Finding::Decompose(d) => {
                let Some(stem) = d.output.clone() else {
                    continue;
                };
                let table = decomposition_table(&d.fit);
                let body = s.input.split(" into ").next().unwrap_or(&s.input);
                let title = format!("decompose {body}");
                let labels = if d.fit.channel == crate::syntax::ast::Channel::SChannel {
                    crate::plot::Labels::decompose_four_point(&title)
                } else {
                    crate::plot::Labels::decompose(&title)
                };
                d.written = write_scan(&table, base, &stem, &labels).map_err(at)?;
            }
            Finding::Structures(f) => {
                let (Some(stem), Some(fit)) = (f.output.clone(), f.fit.as_ref()) else {
                    continue;
                };
                let table = structure_table(fit);
                let body = s.input.split(" into ").next().unwrap_or(&s.input);
                let labels = crate::plot::Labels::structures(body);
                f.written = write_scan(&table, base, &stem, &labels).map_err(at)?;
            }
            _ => {}
        }
    }
    Ok(())
}

/// The coefficient functions f_i(η) of a decomposition into structures as
/// a scan table: both sides are f_i, and each row's verdict is that of the
/// residual at the check configurations of its η.
fn structure_table(
    fit: &crate::numeric::structures::StructureFit,
) -> crate::numeric::session::Scan {
    use crate::numeric::agreement::Agreement;
    crate::numeric::session::Scan {
        param: "eta".into(),
        labels: (1..=fit.structures.len())
            .map(|k| format!("f{k}"))
            .collect(),
        rows: fit
            .rows
            .iter()
            .map(|(x, f, _)| (*x, f.clone(), f.clone()))
            .collect(),
        judged: fit
            .rows
            .iter()
            .map(|(_, f, r)| {
                let verdict = if *r <= crate::numeric::structures::STRUCTURE_TOLERANCE {
                    Agreement::Agree
                } else {
                    Agreement::Disagree
                };
                f.iter().map(|_| (*r, verdict.clone())).collect()
            })
            .collect(),
        errors: Vec::new(),
    }
}

/// A fit's G(ξ) and expansion as a scan table, for its CSV and SVG.
fn decomposition_table(
    fit: &crate::numeric::decompose::Decomposition,
) -> crate::numeric::session::Scan {
    use crate::numeric::agreement::Agreement;
    let four_point = fit.channel == crate::syntax::ast::Channel::SChannel;
    crate::numeric::session::Scan {
        param: if four_point {
            "abs_z"
        } else if fit.delta12.is_some() {
            "chi"
        } else {
            "xi"
        }
        .into(),
        labels: vec![String::new()],
        rows: fit
            .rows
            .iter()
            .map(|(x, g, e)| (*x, vec![*g], vec![*e]))
            .collect(),
        judged: fit
            .rows
            .iter()
            .map(|(_, g, e)| {
                let size = g.abs().max(e.abs()).max(f64::MIN_POSITIVE);
                let r = (g - e).abs() / size;
                let verdict = if r <= crate::numeric::decompose::DECOMPOSE_TOLERANCE {
                    Agreement::Agree
                } else {
                    Agreement::Disagree
                };
                vec![(r, verdict)]
            })
            .collect(),
        errors: Vec::new(),
    }
}

/// Writes `stem.csv` and `stem.svg` inside the file's folder, both or
/// neither (see [`crate::files::replace_together`]).
fn write_scan(
    scan: &crate::numeric::session::Scan,
    base: &Path,
    stem: &str,
    labels: &crate::plot::Labels,
) -> Result<Vec<String>> {
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
    Ok(vec![csv.display().to_string(), svg.display().to_string()])
}

/// One file of a folder checked by `test`.
#[derive(Clone, Debug, Serialize)]
pub struct FileEntry {
    pub path: String,
    pub passed: bool,
    /// The file's outcome, or its input error.
    pub outcome: Option<FileOutcome>,
    pub error: Option<InputError>,
    /// Expected results rewritten under `--accept`.
    pub accepted: usize,
}

/// What `test FOLDER` found.
#[derive(Clone, Debug, Serialize)]
pub struct FolderOutcome {
    pub files: Vec<FileEntry>,
    pub passed: usize,
    pub failed: usize,
    pub exit_code: i32,
}

/// Checks every `.ward` file below `dir` (sorted by path): one line per
/// file, then `N passed, M failed`. A file passes when all its claims hold;
/// an input error fails it with the diagnostic's first line, and makes the
/// exit code 2 (as `check` would), not 1. Files run on up to `opts.jobs`
/// threads; the lines come in path order all the same.
pub fn run_folder(dir: &Path, opts: &Options) -> Result<Outcome> {
    let folder = check_folder(dir, opts)?;
    let report = if opts.json {
        crate::report::json(&folder)
    } else {
        let mut report = String::new();
        for f in &folder.files {
            let summary = match (&f.outcome, &f.error) {
                (Some(o), _) => {
                    let line = crate::report::text::closing_line(o);
                    if f.accepted > 0 {
                        format!("{line}; accepted {} new expected result(s)", f.accepted)
                    } else {
                        line
                    }
                }
                (None, Some(e)) => match (&e.file, e.line, e.column) {
                    (Some(file), Some(l), Some(c)) => format!("{file}:{l}:{c}: {}", e.message),
                    _ => e.message.clone(),
                },
                (None, None) => String::new(),
            };
            let word = if f.passed { "pass" } else { "FAIL" };
            report.push_str(&format!("{word}  {}  ({summary})\n", f.path));
        }
        report.push_str(&format!(
            "{} passed, {} failed\n",
            folder.passed, folder.failed
        ));
        if opts.style == Style::Ascii {
            crate::charset::to_ascii(&report)
        } else {
            report
        }
    };
    Ok(Outcome {
        report,
        code: folder.exit_code,
        edits: Vec::new(),
        checked: None,
        accepted: 0,
    })
}

/// Checks every `.ward` file below `dir`, as values (see [`run_folder`]).
pub fn check_folder(dir: &Path, opts: &Options) -> Result<FolderOutcome> {
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
    let entries = crate::jobs::map_ordered(
        opts.jobs,
        &files,
        false,
        |_, path| {
            let checked =
                run_path(path, Mode::Check, &each).and_then(|out| accept(dir, path, out, &each));
            let path = path.display().to_string();
            Ok::<_, std::convert::Infallible>(match checked {
                Ok(out) => FileEntry {
                    path,
                    passed: out.code == 0,
                    outcome: out.checked,
                    error: None,
                    accepted: out.accepted,
                },
                Err(e) => FileEntry {
                    path,
                    passed: false,
                    outcome: None,
                    error: Some(InputError::of(&e)),
                    accepted: 0,
                },
            })
        },
        &mut progress,
    );
    let files: Vec<FileEntry> = entries.into_iter().flatten().collect();
    let passed = files.iter().filter(|f| f.passed).count();
    let failed = files.len() - passed;
    let wrong_input = files.iter().any(|f| f.error.is_some());
    Ok(FolderOutcome {
        passed,
        failed,
        exit_code: if wrong_input {
            2
        } else {
            i32::from(failed > 0)
        },
        files,
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
    again.accepted = edits.len();
    Ok(again)
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
