//! One expression of a file evaluated at many configurations: the table a
//! caller plots or fits (the Python module's `evaluate`). The file gives
//! the declarations, the model and the values; each row replaces some
//! parameters and point positions. Nothing is printed or written.

use std::path::Path;
use std::sync::Arc;

use crate::diagnostic::{Error, ErrorKind, Result, Source};
use crate::engine::Engine;
use crate::lower::{self, ItemKind};
use crate::numeric::session::{Row, Session};
use crate::run::{load_rules, Options};
use crate::syntax;

/// The values of an expression at each row.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Table {
    /// One label per component (`mu=0 nu=1`), or one empty label for a
    /// scalar expression.
    pub labels: Vec<String>,
    /// Per row, one value per component.
    pub values: Vec<Vec<f64>>,
    /// Per row, per component: the error estimate (quadrature error plus
    /// rounding bound).
    pub errors: Vec<Vec<f64>>,
}

/// Evaluates `expression` in the setting of the file `source` (its
/// declarations, model and values; its statements are not checked) at each
/// of `rows`. `base` is the folder rule files are read relative to.
/// Errors in the expression are reported on an `evaluate` line appended to
/// the file's text.
pub fn evaluate(
    source: &Arc<Source>,
    base: &Path,
    expression: &str,
    rows: &[Row],
    opts: &Options,
) -> Result<Table> {
    if expression.contains('\n') {
        return Err(Error::new(
            ErrorKind::Numeric,
            "the expression to evaluate must be one line",
        ));
    }
    let text = format!("{}\nevaluate {expression}\n", source.text.trim_end());
    let whole = Source::new(source.name.clone(), text);
    crate::budget::on_checker_stack(|| {
        let program = lower::lower(&whole, &syntax::parse_file(&whole)?)?;
        let Some(ItemKind::Evaluate { expr, free }) = program.items.last().map(|i| &i.kind) else {
            return Err(Error::new(ErrorKind::Numeric, "nothing to evaluate"));
        };
        let book = load_rules(&program, base, opts)?;
        let engine = Engine::new(program.ctx.clone(), Arc::new(book), opts.limits)?;
        let session = Session::new(&program.ctx, &engine, &program.numeric)?;
        let evaluations = session.evaluate_rows(expr, free, rows, opts.jobs)?;
        let mut table = Table::default();
        for (k, e) in evaluations.iter().enumerate() {
            if k == 0 {
                table.labels = e.labels();
            }
            table
                .values
                .push(e.components.iter().map(|(_, v)| v.value).collect());
            table.errors.push(
                e.components
                    .iter()
                    .map(|(_, v)| v.error + v.rounding)
                    .collect(),
            );
        }
        Ok(table)
    })
}
