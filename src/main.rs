//! The `wardsmith` command: parse arguments, run, print, exit.
//!
//! Exit codes: 0 every claim holds, 1 some claim is not proved, 2 the input
//! is wrong (the diagnostic says where).

use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};
use wardsmith::egraph::Limits;
use wardsmith::run::{run_folder, run_path, Mode, Options};
use wardsmith::term::print::Style;

use wardsmith::help::CONVENTIONS;

/// Simplify and check conformal Ward identities written in .ward files.
#[derive(Parser, Debug)]
#[command(name = "wardsmith", version, after_help = CONVENTIONS)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Print every `simplify` statement of FILE in contact-term normal form.
    #[command(after_help = CONVENTIONS)]
    Simplify(FileArgs),
    /// Check every statement of FILE that states something: each `claim`,
    /// each `simplify … expect …`, each step of a `derivation`, and on the
    /// file's model each `compare`, `flux`, `scan`, `decompose`, `structures` and
    /// `perturb … expect`; print
    /// what `simplify`, `evaluate`, `classify` and `solve` find.
    ///
    /// Statements: dimension, halfspace, scalar, vector, tensor, boundary,
    /// points, parameters, positive, parallel, function, let, rules, killing,
    /// classify, simplify, claim, derivation, slip, place, model,
    /// coefficient, values, sample, tolerance, evaluate, compare, flux,
    /// solve, scan, decompose, structures, perturb.
    /// One example each: `wardsmith help language`.
    #[command(after_help = CONVENTIONS)]
    Check(FileArgs),
    /// Check every .ward file below FOLDER (links are not followed): one
    /// line per file, then `N passed, M failed`.
    #[command(
        after_help = CONVENTIONS,
        mut_arg("file", |a| a.value_name("FOLDER").help("The folder whose .ward files are checked"))
    )]
    Test(TestArgs),
    /// The .ward language: every statement kind with an example, then the
    /// forms of expressions. Also `wardsmith help language`.
    #[command(after_help = wardsmith::help::language())]
    Language,
}

#[derive(Args, Debug)]
struct TestArgs {
    #[command(flatten)]
    common: FileArgs,
    /// Rewrite each `expect` that does not hold with the result wardsmith
    /// finds, in place; every other byte of the file is kept.
    #[arg(long)]
    accept: bool,
    /// Also write the CSV and SVG files of each `scan … into`, as `check`
    /// does; without it `test` leaves them as they are.
    #[arg(long)]
    write_scans: bool,
}

#[derive(Args, Debug)]
struct FileArgs {
    /// The .ward file.
    file: PathBuf,
    /// Load an extra rule file (may be repeated).
    #[arg(long = "rules", value_name = "FILE")]
    rules: Vec<PathBuf>,
    /// Print with ASCII names (del, delta, <>, par(x)) instead of ∂, δ, ⟨⟩, x∥.
    /// The default on a terminal whose locale is not UTF-8.
    #[arg(long, conflicts_with = "latex")]
    ascii: bool,
    /// Print with ∂, δ, ⟨⟩, x∥ whatever the locale says.
    #[arg(long, conflicts_with_all = ["ascii", "latex", "json"])]
    unicode: bool,
    /// Print results as LaTeX, for pasting into a paper.
    #[arg(long, conflicts_with = "json")]
    latex: bool,
    /// Print one JSON document, for scripts.
    #[arg(long, conflicts_with = "ascii")]
    json: bool,
    /// Stop the e-graph at this many e-nodes.
    #[arg(long, value_name = "N", default_value_t = Limits::default().nodes)]
    node_limit: usize,
    /// Stop the e-graph after this many iterations.
    #[arg(long, value_name = "N", default_value_t = Limits::default().iterations)]
    iter_limit: usize,
    /// Run on N threads: the files of `test`, the steps of a `scan`, the
    /// configurations of `sample` [default: the cores available]. The output
    /// is the same with any N.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u32).range(1..))]
    jobs: Option<u32>,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let mut keep_scan_files = false;
    let (mode, args, folder, accept) = match cli.command {
        Command::Simplify(a) => (Mode::Simplify, a, false, false),
        Command::Check(a) => (Mode::Check, a, false, false),
        Command::Test(t) => {
            keep_scan_files = !t.write_scans;
            (Mode::Check, t.common, true, t.accept)
        }
        Command::Language => {
            return match print_report(&wardsmith::help::language()) {
                Ok(()) => ExitCode::SUCCESS,
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => ExitCode::SUCCESS,
                Err(_) => ExitCode::from(2),
            }
        }
    };
    let opts = Options {
        rules: args.rules,
        style: if args.latex {
            Style::Latex
        } else if args.ascii
            || !(args.unicode
                || wardsmith::charset::unicode_output(std::io::stdout().is_terminal(), |k| {
                    std::env::var(k).ok()
                }))
        {
            Style::Ascii
        } else {
            Style::Unicode
        },
        limits: Limits {
            nodes: args.node_limit,
            iterations: args.iter_limit,
            ..Limits::default()
        },
        // Long numeric work reports progress on a terminal, nowhere else.
        progress: std::io::stderr().is_terminal(),
        json: args.json,
        accept,
        keep_scan_files,
        jobs: args
            .jobs
            .map_or_else(wardsmith::jobs::available, |n| n as usize),
    };
    let result = if folder {
        run_folder(&args.file, &opts)
    } else {
        run_path(&args.file, mode, &opts)
    };
    match result {
        Ok(outcome) => {
            // Control characters of the input (in file names, say) are
            // printed escaped; JSON escapes its own.
            let report = if args.json {
                outcome.report.as_str().into()
            } else {
                wardsmith::charset::escape_controls(&outcome.report)
            };
            match print_report(&report) {
                Ok(()) => ExitCode::from(outcome.code as u8),
                // The reader stopped reading (`| head`): nothing to say.
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => {
                    ExitCode::from(outcome.code as u8)
                }
                Err(e) => {
                    let _ = writeln!(
                        std::io::stderr(),
                        "error[io]: cannot write the report to standard output: {e}"
                    );
                    ExitCode::from(2)
                }
            }
        }
        Err(e) if args.json => {
            // Scripts read one document from standard output.
            let _ = print_report(&wardsmith::report::error_json(&e));
            ExitCode::from(2)
        }
        Err(e) => {
            let color = std::io::stderr().is_terminal();
            let _ = std::io::stderr().write_all(&e.render_to(color));
            ExitCode::from(2)
        }
    }
}

/// Writes the report to standard output and flushes it, returning the
/// error instead of panicking as `print!` would (a closed pipe, a full
/// disk).
fn print_report(report: &str) -> std::io::Result<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(report.as_bytes())?;
    out.flush()
}
