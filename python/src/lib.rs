//! The compiled half of the Python module `wardsmith`: checking a file's
//! text and tabulating an expression, with plain values across the
//! boundary (JSON text, lists of floats). The typed Python objects, NumPy
//! arrays and docstrings are in `python/wardsmith/__init__.py`.

use std::path::Path;

use pyo3::create_exception;
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

use wardsmith::diagnostic::{Error, Source};
use wardsmith::numeric::session::Row;
use wardsmith::outcome::Mode;
use wardsmith::report::{self, Format};
use wardsmith::run::{self, Options};
use wardsmith::term::print::Style;

create_exception!(
    _core,
    WardError,
    PyValueError,
    "An input error in a .ward file or expression: args are (the rendered \
     diagnostic with file, line and column; the same as a JSON document)."
);

fn input_error(e: Error) -> PyErr {
    WardError::new_err((e.render(), report::error_json(&e)))
}

fn options(rules: Vec<String>, jobs: usize) -> Options {
    Options {
        rules: rules.into_iter().map(Into::into).collect(),
        style: Style::Unicode,
        keep_scan_files: true,
        jobs,
        ..Options::default()
    }
}

/// Checks a file's text. Returns (JSON document, text report, LaTeX
/// fragment, exit code). `base` is the folder its rule files and scan
/// outputs are relative to; no file is written.
#[pyfunction]
#[pyo3(signature = (text, name, base, mode = "check", rules = Vec::new(), jobs = 1, ascii = false))]
#[allow(clippy::too_many_arguments)]
fn check(
    py: Python<'_>,
    text: &str,
    name: &str,
    base: &str,
    mode: &str,
    rules: Vec<String>,
    jobs: usize,
    ascii: bool,
) -> PyResult<(String, String, String, i32)> {
    let mode = match mode {
        "check" => Mode::Check,
        "simplify" => Mode::Simplify,
        other => {
            return Err(PyValueError::new_err(format!(
                "mode must be \"check\" or \"simplify\", not {other:?}"
            )))
        }
    };
    let source = Source::new(name, text);
    let opts = options(rules, jobs);
    let base = Path::new(base).to_path_buf();
    let checked = py
        .detach(|| run::check_source(&source, &base, mode, &opts))
        .map_err(input_error)?;
    let words = if ascii {
        Format::Ascii
    } else {
        Format::Unicode
    };
    Ok((
        report::render(&checked, Format::Json),
        report::render(&checked, words),
        report::render(&checked, Format::Latex),
        checked.exit_code,
    ))
}

/// Evaluates `expression` in the setting of the file `text` at `rows`
/// configurations. `scalars` holds (name, one value per row) and `points`
/// (name, one position per row). Returns (component labels, values per
/// row, error estimates per row).
#[pyfunction]
#[pyo3(signature = (text, name, base, expression, rows, scalars, points, rules = Vec::new(), jobs = 1))]
#[allow(clippy::too_many_arguments, clippy::type_complexity)]
fn evaluate(
    py: Python<'_>,
    text: &str,
    name: &str,
    base: &str,
    expression: &str,
    rows: usize,
    scalars: Vec<(String, Vec<f64>)>,
    points: Vec<(String, Vec<Vec<f64>>)>,
    rules: Vec<String>,
    jobs: usize,
) -> PyResult<(Vec<String>, Vec<Vec<f64>>, Vec<Vec<f64>>)> {
    for (n, v) in &scalars {
        if v.len() != rows {
            return Err(PyValueError::new_err(format!(
                "`{n}` has {} values for {rows} rows",
                v.len()
            )));
        }
    }
    for (n, v) in &points {
        if v.len() != rows {
            return Err(PyValueError::new_err(format!(
                "`{n}` has {} positions for {rows} rows",
                v.len()
            )));
        }
    }
    let table_rows: Vec<Row> = (0..rows)
        .map(|k| Row {
            scalars: scalars.iter().map(|(n, v)| (n.clone(), v[k])).collect(),
            points: points
                .iter()
                .map(|(n, v)| (n.clone(), v[k].clone()))
                .collect(),
        })
        .collect();
    let source = Source::new(name, text);
    let opts = options(rules, jobs);
    let base = Path::new(base).to_path_buf();
    let table = py
        .detach(|| wardsmith::tabulate::evaluate(&source, &base, expression, &table_rows, &opts))
        .map_err(input_error)?;
    Ok((table.labels, table.values, table.errors))
}

#[pymodule]
fn _core(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(check, m)?)?;
    m.add_function(wrap_pyfunction!(evaluate, m)?)?;
    m.add("WardError", m.py().get_type::<WardError>())?;
    Ok(())
}
