//! The JSON report against its schema (`docs/report.schema.json`), for
//! every example and every case file, in `check` and `simplify` mode, and
//! for input errors and a folder; and the LaTeX report of every example is
//! a fragment a paper can `\input`: balanced, and without a line of the
//! plain-text report.
//!
//! The schema is checked by the small validator below (the keywords the
//! schema uses: `$ref` to `#/$defs`, `oneOf`, `anyOf`, `type`, `properties`,
//! `required`, `additionalProperties`, `items`, `enum`, `const`,
//! `minItems`, `maxItems`, `minimum`); a keyword it does not know fails the
//! test rather than being ignored.

use std::path::{Path, PathBuf};

use serde_json::Value;
use wardsmith::run::{run_folder, run_path, Mode, Options};
use wardsmith::term::print::Style;

fn schema() -> Value {
    let text = std::fs::read_to_string("docs/report.schema.json").expect("the schema is shipped");
    serde_json::from_str(&text).expect("the schema is JSON")
}

/// Why `v` does not match `s`, or None.
fn check(root: &Value, s: &Value, v: &Value, at: &str) -> Option<String> {
    let obj = s.as_object().expect("a schema is an object");
    for key in obj.keys() {
        assert!(
            [
                "$schema",
                "title",
                "description",
                "$defs",
                "$ref",
                "oneOf",
                "anyOf",
                "type",
                "properties",
                "required",
                "additionalProperties",
                "items",
                "enum",
                "const",
                "minItems",
                "maxItems",
                "minimum",
            ]
            .contains(&key.as_str()),
            "the validator does not know `{key}`"
        );
    }
    if let Some(r) = obj.get("$ref").and_then(Value::as_str) {
        let name = r.strip_prefix("#/$defs/").expect("local references only");
        return check(root, &root["$defs"][name], v, at);
    }
    if let Some(options) = obj.get("oneOf").and_then(Value::as_array) {
        let fits: Vec<Option<String>> = options.iter().map(|o| check(root, o, v, at)).collect();
        let n = fits.iter().filter(|f| f.is_none()).count();
        if n != 1 {
            let why: Vec<String> = fits.into_iter().flatten().collect();
            return Some(format!(
                "{at}: {n} of the oneOf options fit {v}; {}",
                why.join(" | ")
            ));
        }
    }
    if let Some(options) = obj.get("anyOf").and_then(Value::as_array) {
        let why: Vec<String> = options
            .iter()
            .filter_map(|o| check(root, o, v, at))
            .collect();
        if why.len() == options.len() {
            return Some(format!("{at}: no anyOf option fits: {}", why.join(" | ")));
        }
    }
    if let Some(t) = obj.get("type") {
        let types: Vec<&str> = match t {
            Value::String(s) => vec![s.as_str()],
            Value::Array(a) => a.iter().filter_map(Value::as_str).collect(),
            _ => panic!("type is a string or a list"),
        };
        let is = |t: &str| match t {
            "object" => v.is_object(),
            "array" => v.is_array(),
            "string" => v.is_string(),
            "number" => v.is_number(),
            "integer" => v.is_u64() || v.is_i64(),
            "boolean" => v.is_boolean(),
            "null" => v.is_null(),
            other => panic!("unknown type {other}"),
        };
        if !types.iter().any(|t| is(t)) {
            return Some(format!("{at}: {v} is not of type {types:?}"));
        }
    }
    if let Some(e) = obj.get("enum").and_then(Value::as_array) {
        if !e.contains(v) {
            return Some(format!("{at}: {v} is not one of {e:?}"));
        }
    }
    if let Some(c) = obj.get("const") {
        if c != v {
            return Some(format!("{at}: {v} is not {c}"));
        }
    }
    if let (Some(m), Some(x)) = (obj.get("minimum").and_then(Value::as_f64), v.as_f64()) {
        if x < m {
            return Some(format!("{at}: {x} < {m}"));
        }
    }
    if let Some(a) = v.as_array() {
        if let Some(n) = obj.get("minItems").and_then(Value::as_u64) {
            if (a.len() as u64) < n {
                return Some(format!("{at}: fewer than {n} items"));
            }
        }
        if let Some(n) = obj.get("maxItems").and_then(Value::as_u64) {
            if (a.len() as u64) > n {
                return Some(format!("{at}: more than {n} items"));
            }
        }
        if let Some(items) = obj.get("items") {
            for (k, x) in a.iter().enumerate() {
                if let Some(why) = check(root, items, x, &format!("{at}[{k}]")) {
                    return Some(why);
                }
            }
        }
    }
    if let Some(o) = v.as_object() {
        let props = obj.get("properties").and_then(Value::as_object);
        if let Some(required) = obj.get("required").and_then(Value::as_array) {
            for r in required.iter().filter_map(Value::as_str) {
                if !o.contains_key(r) {
                    return Some(format!("{at}: `{r}` is missing"));
                }
            }
        }
        for (k, x) in o {
            let here = format!("{at}.{k}");
            match props.and_then(|p| p.get(k)) {
                Some(p) => {
                    if let Some(why) = check(root, p, x, &here) {
                        return Some(why);
                    }
                }
                None => match obj.get("additionalProperties") {
                    Some(Value::Bool(false)) => return Some(format!("{here} is not allowed")),
                    Some(Value::Bool(true)) | None => {}
                    Some(extra) => {
                        if let Some(why) = check(root, extra, x, &here) {
                            return Some(why);
                        }
                    }
                },
            }
        }
    }
    None
}

fn validate(doc: &str, what: &str) -> Value {
    let v: Value = serde_json::from_str(doc).unwrap_or_else(|e| panic!("{what}: {e}\n{doc}"));
    let root = schema();
    if let Some(why) = check(&root, &root, &v, "$") {
        panic!("{what} does not fit docs/report.schema.json: {why}");
    }
    v
}

fn ward_files(dir: &str) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .expect("the folder exists")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "ward"))
        .collect();
    files.sort();
    files
}

/// The slow examples are checked once elsewhere (tests/cli.rs) and by the
/// LaTeX snapshots.
const SLOW: &[&str] = &["coupling-derivation.ward", "displacement-neumann.ward"];

fn json_opts() -> Options {
    Options {
        json: true,
        keep_scan_files: true,
        ..Options::default()
    }
}

#[test]
fn the_schema_rejects_what_it_should() {
    let root = schema();
    for bad in [
        r#"{"items": []}"#,
        r#"{"error": {"kind": "syntax"}, "exit_code": 2}"#,
        r#"{"error": {"kind": "spelling", "message": "", "file": null, "line": null, "column": null, "label": "", "notes": [], "rendered": ""}, "exit_code": 2}"#,
    ] {
        let v: Value = serde_json::from_str(bad).unwrap();
        assert!(check(&root, &root, &v, "$").is_some(), "{bad} passed");
    }
}

#[test]
fn every_example_and_case_fits_the_schema() {
    let mut files = Vec::new();
    for dir in [
        "examples",
        "tests/cases/simplify",
        "tests/cases/integrated",
        "tests/cases/numeric",
        "tests/cases/failing",
    ] {
        files.extend(
            ward_files(dir)
                .into_iter()
                .filter(|p| !SLOW.iter().any(|s| p.ends_with(s))),
        );
    }
    assert!(files.len() > 50, "{}", files.len());
    let mut kinds = std::collections::BTreeSet::new();
    for path in &files {
        for mode in [Mode::Check, Mode::Simplify] {
            let out = run_path(path, mode, &json_opts())
                .unwrap_or_else(|e| panic!("{}: {}", path.display(), e.render()));
            let v = validate(&out.report, &format!("{} ({mode:?})", path.display()));
            for item in v["items"].as_array().into_iter().flatten() {
                kinds.insert(item["kind"].as_str().unwrap_or("").to_string());
            }
            assert_eq!(v["exit_code"].as_i64(), Some(i64::from(out.code)));
        }
    }
    // Every statement kind is among them.
    for kind in [
        "simplify",
        "expect",
        "claim",
        "derivation",
        "classify",
        "evaluate",
        "solve",
        "flux",
        "compare",
        "scan",
        "decompose",
        "structures",
    ] {
        assert!(kinds.contains(kind), "no `{kind}` checked: {kinds:?}");
    }
}

#[test]
fn input_errors_and_folders_fit_the_schema() {
    for path in ward_files("tests/cases/errors").iter().take(40) {
        let err = match run_path(path, Mode::Check, &json_opts()) {
            Ok(out) => panic!("{} ran: {}", path.display(), out.report),
            Err(e) => e,
        };
        let v = validate(
            &wardsmith::report::error_json(&err),
            &path.display().to_string(),
        );
        assert_eq!(v["exit_code"], 2);
    }
    let out = run_folder(Path::new("tests/cases/simplify"), &json_opts()).expect("the folder runs");
    let v = validate(&out.report, "the folder tests/cases/simplify");
    assert_eq!(out.code, 1);
    assert_eq!(v["exit_code"], 1);
}

/// Every example's LaTeX: `\begin`/`\end`, braces, `\left`/`\right` and `$`
/// balanced; every line a comment, a LaTeX command, or inside a display or
/// table; and none of the plain-text report's lines.
#[test]
fn latex_of_every_example_is_balanced_and_without_plain_text() {
    for path in ward_files("examples") {
        if SLOW.iter().any(|s| path.ends_with(s)) {
            continue;
        }
        let opts = Options {
            style: Style::Latex,
            keep_scan_files: true,
            ..Options::default()
        };
        let out = run_path(&path, Mode::Check, &opts).unwrap_or_else(|e| panic!("{}", e.render()));
        assert_balanced_latex(&out.report, &path.display().to_string());
        compile_if_possible(&out.report, &path);
    }
}

/// Compiles the fragment inside a minimal document with `pdflatex` when
/// one is installed; says so and skips otherwise.
fn compile_if_possible(tex: &str, path: &Path) {
    let Ok(found) = std::process::Command::new("pdflatex")
        .arg("--version")
        .output()
    else {
        eprintln!(
            "pdflatex is not installed: the LaTeX of {} is checked for balance only",
            path.display()
        );
        return;
    };
    if !found.status.success() {
        return;
    }
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("latex");
    std::fs::create_dir_all(&dir).expect("scratch folder");
    let stem = path
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or("example");
    let doc = format!(
        "\\documentclass{{article}}\n\\usepackage{{amsmath,amssymb}}\n\\begin{{document}}\n{tex}\\end{{document}}\n"
    );
    std::fs::write(dir.join(format!("{stem}.tex")), doc).expect("written");
    let run = std::process::Command::new("pdflatex")
        .args([
            "-interaction=nonstopmode",
            "-halt-on-error",
            &format!("{stem}.tex"),
        ])
        .current_dir(&dir)
        .output()
        .expect("pdflatex runs");
    assert!(
        run.status.success(),
        "{} does not compile:\n{}",
        path.display(),
        String::from_utf8_lossy(&run.stdout)
    );
}

fn assert_balanced_latex(tex: &str, what: &str) {
    let mut environments: Vec<String> = Vec::new();
    for (k, line) in tex.lines().enumerate() {
        let at = format!("{what}, line {}: {line}", k + 1);
        let trimmed = line.trim_start();
        if trimmed.is_empty() || trimmed.starts_with('%') {
            continue;
        }
        for plain in ["line ", "model:", "sample ", "  [", "step ", "stop reason"] {
            assert!(!line.starts_with(plain), "plain text: {at}");
        }
        // Outside an environment, only commands.
        assert!(
            !environments.is_empty() || trimmed.starts_with('\\'),
            "text outside a display: {at}"
        );
        let code = strip_comment(line);
        let mut rest = code.as_str();
        while let Some(i) = rest.find("\\begin{") {
            let name = &rest[i + 7..];
            let end = name.find('}').expect("closed name");
            environments.push(name[..end].to_string());
            rest = &name[end..];
        }
        let mut rest = code.as_str();
        while let Some(i) = rest.find("\\end{") {
            let name = &rest[i + 5..];
            let end = name.find('}').expect("closed name");
            assert_eq!(
                environments.pop().as_deref(),
                Some(&name[..end]),
                "unbalanced environment: {at}"
            );
            rest = &name[end..];
        }
    }
    assert!(environments.is_empty(), "{what}: unclosed {environments:?}");
    let code: String = tex
        .lines()
        .map(strip_comment)
        .collect::<Vec<_>>()
        .join("\n");
    let (mut depth, mut dollars) = (0i64, 0usize);
    let chars: Vec<char> = code.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        match chars[i] {
            '\\' => i += 1,
            '{' => depth += 1,
            '}' => {
                depth -= 1;
                assert!(depth >= 0, "{what}: a `}}` closes nothing");
            }
            '$' => dollars += 1,
            _ => {}
        }
        i += 1;
    }
    assert_eq!(depth, 0, "{what}: braces do not balance");
    assert_eq!(dollars % 2, 0, "{what}: `$` do not pair");
    assert_eq!(
        code.matches("\\left").count(),
        code.matches("\\right").count(),
        "{what}: \\left and \\right do not pair"
    );
}

/// A line without its comment (an unescaped `%` to the end).
fn strip_comment(line: &str) -> String {
    let mut out = String::new();
    let mut escaped = false;
    for c in line.chars() {
        if c == '%' && !escaped {
            break;
        }
        escaped = c == '\\' && !escaped;
        out.push(c);
    }
    out
}
