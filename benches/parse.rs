//! Benchmarks of parsing and lowering alone, on inputs whose cost used to
//! grow faster than their length: many one-line statements (a line number
//! per statement), and operands nested a thousand deep (juxtaposition, and
//! a call whose `)` is missing). Run with `cargo bench --bench parse`; the
//! times should grow linearly with the size argument.

use wardsmith::budget::on_checker_stack;
use wardsmith::diagnostic::Source;
use wardsmith::{lower, syntax};

fn main() {
    divan::main();
}

/// `n` one-line statements.
fn statements(n: usize) -> String {
    let mut text = String::from("dimension 4\nparameters a\n");
    for _ in 0..n {
        text.push_str("simplify a + 2 a\n");
    }
    text
}

#[divan::bench(args = [5_000, 20_000])]
fn parse_and_lower_statements(bencher: divan::Bencher, n: usize) {
    let source = Source::new("many.ward", statements(n));
    bencher.bench(|| {
        let file = syntax::parse_file(&source).expect("valid");
        lower::lower(&source, &file).expect("valid")
    });
}

#[divan::bench(args = [250, 1_000])]
fn parse_nested_juxtaposition(bencher: divan::Bencher, n: usize) {
    let text = format!(
        "dimension 4\nparameters a\nsimplify {}1{}\n",
        "a (".repeat(n),
        ")".repeat(n)
    );
    let source = Source::new("nested.ward", text);
    bencher.bench(|| on_checker_stack(|| syntax::parse_file(&source).expect("valid")));
}

#[divan::bench(args = [250, 1_000])]
fn parse_unclosed_calls(bencher: divan::Bencher, n: usize) {
    let text = format!("dimension 4\nfunction F\nsimplify {}1\n", "F(".repeat(n));
    let source = Source::new("unclosed.ward", text);
    bencher.bench(|| on_checker_stack(|| syntax::parse_file(&source).expect_err("unclosed")));
}
