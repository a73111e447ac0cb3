//! The documents a newcomer reads first, README.md and docs/tutorial.md,
//! run as they stand.
//!
//! Every fenced block of these documents is one of:
//! - ```` ```ward ````: a whole `.ward` file. It is saved in a scratch
//!   folder under the name its first line gives (`# wall.ward: …`, or
//!   `# derivations/dilatation.ward: …`), else `block-N.ward`, and
//!   `wardsmith check` must exit 0 on it; ```` ```ward fails ```` marks a
//!   file shown for a claim that does not hold, on which `check` must exit 1.
//! - ```` ```console ````: lines `$ wardsmith ARGS` followed by what the
//!   command prints (standard output, then standard error). Each command
//!   runs in the scratch folder, where the blocks above it were saved, and
//!   must print exactly that (trailing white space aside).
//! - ```` ```rules ````: rules as in a `.rules` file; they must parse (a
//!   block without a `ruleset` line is read inside one).
//! - ```` ```text ````: anything else, not checked.
//!
//! A fence without a word is refused, so that no example goes unchecked by
//! accident. Every file the documents cite (a link, or a backticked name
//! ending in `.ward`, `.rules` or `.md`) must be in the repository.

use std::path::{Path, PathBuf};
use std::process::Command;

use wardsmith::diagnostic::Source;

/// One fenced block: its info string, its first line number and its text.
struct Block {
    info: String,
    line: usize,
    text: String,
}

fn blocks(doc: &str) -> Vec<Block> {
    let mut out = Vec::new();
    let mut open: Option<Block> = None;
    for (i, line) in doc.lines().enumerate() {
        if let Some(rest) = line.strip_prefix("```") {
            match open.take() {
                Some(block) => out.push(block),
                None => {
                    open = Some(Block {
                        info: rest.trim().to_string(),
                        line: i + 1,
                        text: String::new(),
                    })
                }
            }
        } else if let Some(block) = open.as_mut() {
            block.text.push_str(line);
            block.text.push('\n');
        }
    }
    assert!(open.is_none(), "a fenced block is not closed");
    out
}

/// The file name a `.ward` block gives on its first line: `# NAME.ward…`.
fn block_name(text: &str) -> Option<String> {
    let first = text.lines().next()?.strip_prefix('#')?.trim_start();
    let name = first.split([':', ' ']).next()?;
    name.ends_with(".ward").then(|| name.to_string())
}

/// A fresh scratch folder for one document.
fn scratch(doc: &str) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
        .join("readme")
        .join(doc.replace('/', "-"));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("scratch folder");
    dir
}

fn wardsmith(dir: &Path, args: &[&str]) -> (i32, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_wardsmith"))
        .current_dir(dir)
        .args(args)
        .output()
        .expect("the binary runs");
    let mut text = String::from_utf8_lossy(&out.stdout).into_owned();
    text.push_str(&String::from_utf8_lossy(&out.stderr));
    (out.status.code().unwrap_or(-1), text)
}

/// Lines without trailing white space, trailing blank lines dropped.
fn normalise(text: &str) -> String {
    let lines: Vec<&str> = text.lines().map(str::trim_end).collect();
    let end = lines
        .iter()
        .rposition(|l| !l.is_empty())
        .map_or(0, |i| i + 1);
    lines[..end].join("\n")
}

/// Runs every block of the document at `path` (relative to the crate root)
/// and returns the names of the `.ward` files it saved.
fn check_document(path: &str) -> Vec<String> {
    let doc = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{path}: {e}"));
    let dir = scratch(path);
    let mut names = Vec::new();
    let mut failures = Vec::new();
    for (n, block) in blocks(&doc).into_iter().enumerate() {
        let at = format!("{path}:{}", block.line);
        let mut words = block.info.split_whitespace();
        match (words.next(), words.next()) {
            (Some("ward"), marker) => {
                let expect_fail = match marker {
                    None => false,
                    Some("fails") => true,
                    Some(other) => panic!("{at}: unknown marker `{other}` (only `fails`)"),
                };
                let name = block_name(&block.text).unwrap_or_else(|| format!("block-{n}.ward"));
                let file = dir.join(&name);
                std::fs::create_dir_all(file.parent().expect("a folder")).expect("folder");
                std::fs::write(&file, &block.text).expect("scratch file");
                let (code, out) = wardsmith(&dir, &["check", &name]);
                let want = if expect_fail { 1 } else { 0 };
                if code != want {
                    failures.push(format!(
                        "{at}: `wardsmith check {name}` exited {code}, not {want}:\n{out}"
                    ));
                }
                names.push(name);
            }
            (Some("console"), _) => {
                let mut runs: Vec<(String, String)> = Vec::new();
                for line in block.text.lines() {
                    match line.strip_prefix("$ ") {
                        Some(command) => runs.push((command.to_string(), String::new())),
                        None => {
                            let (_, want) = runs
                                .last_mut()
                                .unwrap_or_else(|| panic!("{at}: output before any `$ ` line"));
                            want.push_str(line);
                            want.push('\n');
                        }
                    }
                }
                for (command, want) in runs {
                    let words: Vec<&str> = command.split_whitespace().collect();
                    assert_eq!(
                        words.first(),
                        Some(&"wardsmith"),
                        "{at}: a console block runs wardsmith only: `{command}`"
                    );
                    let (_, got) = wardsmith(&dir, &words[1..]);
                    if normalise(&got) != normalise(&want) {
                        failures.push(format!(
                            "{at}: `{command}` printed\n{got}\n--- the document says ---\n{want}"
                        ));
                    }
                }
            }
            (Some("rules"), _) => {
                let text = if block.text.trim_start().starts_with("ruleset") {
                    block.text.clone()
                } else {
                    format!("ruleset example\n{}", block.text)
                };
                let source = Source::new(at.clone(), text);
                if let Err(e) = wardsmith::syntax::parse_rule_file(&source) {
                    failures.push(format!("{at}: the rules do not parse:\n{}", e.render()));
                }
            }
            (Some("text"), _) => {}
            // Run by the Python module's suite (python/tests, through
            // tests/python.rs), which needs the module built.
            (Some("python"), _) => {}
            (info, _) => failures.push(format!(
                "{at}: a fenced block says `{}`; use ward, console, rules, python or text",
                info.unwrap_or("")
            )),
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
    names
}

/// Files the document cites: link targets and backticked names ending in
/// `.ward`, `.rules` or `.md`, except the files its own blocks save.
fn check_citations(path: &str, saved: &[String]) {
    let doc = std::fs::read_to_string(path).expect("document");
    let base = Path::new(path).parent().expect("a folder");
    let mut missing = Vec::new();
    let mut fenced = false;
    for (i, line) in doc.lines().enumerate() {
        if line.starts_with("```") {
            fenced = !fenced;
        }
        if fenced {
            continue;
        }
        // [text](target), outside code spans
        let prose: String = line
            .split('`')
            .enumerate()
            .filter(|(k, _)| k % 2 == 0)
            .map(|(_, piece)| piece)
            .collect::<Vec<_>>()
            .join(" ");
        for (start, _) in prose.match_indices("](") {
            let rest = &prose[start + 2..];
            let Some(end) = rest.find(')') else { continue };
            let target = rest[..end].split('#').next().unwrap_or("");
            if target.is_empty() || target.contains("://") || target.starts_with("mailto:") {
                continue;
            }
            if !base.join(target).exists() {
                missing.push(format!("{path}:{}: link to {target}", i + 1));
            }
        }
        // `name.ward`, `examples/x.rules`, `docs/conventions.md`
        for (k, piece) in line.split('`').enumerate() {
            let cited = k % 2 == 1
                && [".ward", ".rules", ".md"]
                    .iter()
                    .any(|e| piece.ends_with(e) && piece.len() > e.len())
                && piece
                    .chars()
                    .all(|c| c.is_ascii_alphanumeric() || "._-/".contains(c));
            if !cited || saved.iter().any(|s| s == piece) {
                continue;
            }
            let found = if piece.contains('/') {
                Path::new(piece).exists()
            } else {
                Path::new(piece).exists() || Path::new("examples").join(piece).exists()
            };
            if !found {
                missing.push(format!("{path}:{}: `{piece}`", i + 1));
            }
        }
    }
    assert!(
        missing.is_empty(),
        "cited but not in the repository:\n{}",
        missing.join("\n")
    );
}

#[test]
fn readme_blocks_run_as_written() {
    let saved = check_document("README.md");
    assert!(saved.len() >= 4, "the README shows whole files: {saved:?}");
    check_citations("README.md", &saved);
}

#[test]
fn tutorial_blocks_run_as_written() {
    let saved = check_document("docs/tutorial.md");
    check_citations("docs/tutorial.md", &saved);
}

#[test]
fn readme_cites_the_tutorial() {
    let readme = std::fs::read_to_string("README.md").expect("README");
    assert!(readme.contains("(docs/tutorial.md)"));
}

#[test]
fn fences_are_read() {
    let doc = "a\n```ward\n# x.ward: one\ndimension 3\n```\n```console\n$ wardsmith check x.ward\nout\n```\n";
    let b = blocks(doc);
    assert_eq!(b.len(), 2);
    assert_eq!(b[0].info, "ward");
    assert_eq!(b[0].line, 2);
    assert_eq!(block_name(&b[0].text).as_deref(), Some("x.ward"));
    assert_eq!(normalise("a  \nb\n\n\n"), "a\nb");
}
