//! LaTeX output of every bundled example, snapshot-tested so that a change
//! in how results read in a paper is seen in review.

use wardsmith::run::{run_path, Mode, Options};
use wardsmith::term::print::Style;

#[test]
fn examples_in_latex() {
    insta::glob!("../examples", "*.ward", |path| {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
        let rel = path.strip_prefix(root).unwrap_or(path);
        let opts = Options {
            style: Style::Latex,
            ..Options::default()
        };
        let out = run_path(rel, Mode::Simplify, &opts).unwrap_or_else(|e| panic!("{}", e.render()));
        insta::assert_snapshot!(out.report);
    });
}
