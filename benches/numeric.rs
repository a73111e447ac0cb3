//! Benchmarks of numeric checks from `.ward` files (parse, lower, model,
//! symbolic derivatives, compilation, quadrature): the W4 flux of all four
//! conformal Killing families through a sphere, d = 3 and 4; C_D and the
//! other wall checks of the free scalar by Wick contraction, d = 4; and the
//! local divergence identity checked by flux around each insertion; the
//! saved derivations of the <T O O> coefficient and of C_D for each wall.
//!
//! Run with `cargo bench --bench numeric`.

use std::path::Path;

use wardsmith::diagnostic::Source;
use wardsmith::run::{run_source, Mode, Options};

fn main() {
    divan::main();
}

const CASES: [&str; 7] = [
    "tests/cases/numeric/flux-d3.ward",
    "tests/cases/numeric/flux-d4.ward",
    "tests/cases/numeric/free-scalar-cd-dirichlet-d4.ward",
    "tests/cases/numeric/local-flux-d4.ward",
    // Saved derivations whose steps are checked on the model.
    "examples/coupling-derivation.ward",
    "examples/displacement-dirichlet.ward",
    "examples/displacement-neumann.ward",
];

#[divan::bench(args = CASES)]
fn check_file(bencher: divan::Bencher, path: &str) {
    let text = std::fs::read_to_string(path).expect("case file exists");
    let source = Source::new(path, text);
    bencher.bench(|| {
        let out =
            run_source(&source, Path::new("."), Mode::Check, &Options::default()).expect("valid");
        assert_eq!(out.code, 0);
        out
    });
}
