//! The case corpus: every file under `tests/cases/errors/` must be rejected
//! with a diagnostic (never a panic), and every file under
//! `tests/cases/simplify/` must run; the diagnostics and reports are
//! snapshots next to this file.
//!
//! Paths are passed relative to the crate root (the working directory of
//! integration tests), because they appear in the diagnostics.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::process::Command;

use wardsmith::run::{run_path, Mode, Options, Outcome};

/// `path` relative to the crate root, with `/` separators.
fn relative(path: &Path) -> PathBuf {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let rel = path.strip_prefix(root).unwrap_or(path);
    PathBuf::from(rel.to_string_lossy().replace('\\', "/"))
}

/// Runs a file, failing the test if the run panics.
fn run(path: &Path, mode: Mode) -> wardsmith::diagnostic::Result<Outcome> {
    let options = Options::default();
    match catch_unwind(AssertUnwindSafe(|| run_path(path, mode, &options))) {
        Ok(result) => result,
        Err(_) => panic!("wardsmith panicked on {}", path.display()),
    }
}

#[test]
fn errors() {
    insta::glob!("cases/errors/*.ward", |path| {
        let rel = relative(path);
        let input = std::fs::read_to_string(path).expect("case file is readable");
        let err = match run(&rel, Mode::Check) {
            Ok(outcome) => panic!(
                "{} should be rejected, but ran with exit code {}:\n{}",
                rel.display(),
                outcome.code,
                outcome.report
            ),
            Err(err) => err,
        };
        insta::with_settings!({ omit_expression => true }, {
            insta::assert_snapshot!(format!("{input}── diagnostic ──\n{}", err.render()));
        });
    });
}

#[test]
fn simplify() {
    insta::glob!("cases/simplify/*.ward", |path| {
        let rel = relative(path);
        let input = std::fs::read_to_string(path).expect("case file is readable");
        let report = |mode| match run(&rel, mode) {
            Ok(outcome) => outcome,
            Err(err) => panic!(
                "{} should run, but failed:\n{}",
                rel.display(),
                err.render()
            ),
        };
        let simplified = report(Mode::Simplify);
        let checked = report(Mode::Check);
        let text = format!(
            "{input}── simplify (exit code {}) ──\n{}── check (exit code {}) ──\n{}",
            simplified.code, simplified.report, checked.code, checked.report
        );
        insta::with_settings!({ omit_expression => true }, {
            insta::assert_snapshot!(text);
        });
    });
}

#[test]
fn binary_reports_input_errors_with_exit_code_2() {
    for (file, at) in [
        (
            "tests/cases/errors/undeclared-point.ward",
            "tests/cases/errors/undeclared-point.ward:5:44",
        ),
        (
            "tests/cases/errors/missing-index-bracket.ward",
            "tests/cases/errors/missing-index-bracket.ward:5:18",
        ),
    ] {
        let out = Command::new(env!("CARGO_BIN_EXE_wardsmith"))
            .current_dir(env!("CARGO_MANIFEST_DIR"))
            .args(["check", file])
            .output()
            .expect("the wardsmith binary runs");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{file}: stderr was\n{stderr}");
        assert!(
            stderr.contains(&format!("--> {at}")),
            "{file}: stderr was\n{stderr}"
        );
        assert!(
            out.stdout.is_empty(),
            "{file}: nothing is printed on stdout for an input error"
        );
    }
}
