//! Benchmarks of `simplify` on the local Ward identity with N insertions,
//! half bulk and half boundary, in a half-space: parse, lower and simplify.
//!
//! Run with `cargo bench --bench simplify`. The e-node count of each size is
//! printed once before timing, so both figures come from one run.

use std::path::Path;

use wardsmith::diagnostic::Source;
use wardsmith::run::{run_source, Mode, Options};

fn main() {
    for n in SIZES {
        let text = file(n);
        let out = run_source(
            &Source::new("bench.ward", text),
            Path::new("."),
            Mode::Simplify,
            &Options::default(),
        )
        .expect("benchmark input is valid");
        let nodes = out
            .report
            .split(" e-nodes")
            .next()
            .and_then(|s| s.rsplit(", ").next())
            .unwrap_or("?");
        eprintln!("{n:>2} insertions: {nodes} e-nodes");
    }
    divan::main();
}

const SIZES: [usize; 4] = [2, 4, 8, 16];

/// A `.ward` file whose one statement is ∂_μ⟨T_{μν}(x) X⟩ with `n` insertions.
fn file(n: usize) -> String {
    let bulk = n / 2;
    let boundary = n - bulk;
    let bulk_points: Vec<String> = (1..=bulk).map(|i| format!("x{i}")).collect();
    let boundary_points: Vec<String> = (1..=boundary).map(|i| format!("s{i}")).collect();
    let inserts: Vec<String> = bulk_points
        .iter()
        .map(|p| format!("O({p})"))
        .chain(boundary_points.iter().map(|p| format!("psi({p})")))
        .collect();
    format!(
        "dimension d\nhalfspace y >= 0\nscalar O dim Delta\nboundary scalar psi dim 3\n\
         points x {}\nboundary points {}\nsimplify ∂[mu](x) <T[mu,nu](x) {}>\n",
        bulk_points.join(" "),
        boundary_points.join(" "),
        inserts.join(" ")
    )
}

#[divan::bench(args = SIZES)]
fn simplify_divergence(bencher: divan::Bencher, n: usize) {
    let source = Source::new("bench.ward", file(n));
    bencher.bench(|| {
        run_source(&source, Path::new("."), Mode::Simplify, &Options::default()).expect("valid")
    });
}
