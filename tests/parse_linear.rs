//! Parsing is linear in the input: nested operands are not parsed twice
//! (juxtaposition looks ahead one token, not one operand, and a name
//! directly followed by `(` is a call or nothing), so 1,000 levels of
//! `g (g (… (1)…))`, closed or with the `)` missing, parse within a budget
//! of grammar calls proportional to their length.
//!
//! The budget is pest's call limit, a count of grammar-rule calls (not a
//! time), and a setting of the whole process: this file holds one test so
//! that nothing else parses under it. Measured: about 100 to 120 calls per
//! byte for these inputs; the cap is 200 per byte. Before the grammar was
//! fixed each level doubled the work (2^1000 calls).

use std::num::NonZeroUsize;

use wardsmith::budget::on_checker_stack;
use wardsmith::diagnostic::Source;
use wardsmith::syntax::parse_file;

#[test]
fn nested_operands_parse_in_linear_calls() {
    let n = 1_000;
    let cases = [
        (
            format!("simplify {}1{}", "g (".repeat(n), ")".repeat(n)),
            true,
        ),
        (format!("simplify {}1", "g (".repeat(n)), false),
        (
            format!("simplify {}1{}", "F(".repeat(n), ")".repeat(n)),
            true,
        ),
        (format!("simplify {}1", "F(".repeat(n)), false),
        (
            format!("simplify {}1{}", "a (b ".repeat(n), ")".repeat(n)),
            true,
        ),
        (format!("simplify {}1", "(F(".repeat(n / 2)), false),
    ];
    for (body, closed) in cases {
        let text = format!("dimension 4\nfunction g F\nparameters a b\n{body}\n");
        pest::set_call_limit(NonZeroUsize::new(200 * text.len()));
        // On the checker's stack, as the command line parses: a thousand
        // levels of grammar recursion need more than a test thread has.
        let result = on_checker_stack(|| parse_file(&Source::new("nested.ward", text)));
        pest::set_call_limit(None);
        match result {
            Ok(_) => assert!(closed, "an unclosed input parsed"),
            Err(e) => {
                assert!(!closed, "{}", e.render());
                // Reported at the innermost unclosed `(`, where the fix goes.
                assert!(
                    e.message == "this bracket is never closed: `)` is missing",
                    "the missing bracket is named: {}",
                    e.message
                );
            }
        }
    }
}
