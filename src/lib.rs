//! wardsmith: a symbolic-numeric rewriting engine for conformal Ward
//! identity derivations.
//!
//! # For a caller
//!
//! - [`run::check_path`] / [`run::check_source`] read and check a `.ward`
//!   file (or text) and return a [`outcome::FileOutcome`]: one typed
//!   [`outcome::Statement`] per statement, each with its
//!   [`outcome::Status`] (proved, proved away from coincident points,
//!   confirmed numerically, not proved, unknown) and its values;
//!   [`check::check_program`] does the same for a lowered file.
//! - [`report::render`] turns an outcome into text, LaTeX or JSON (the JSON
//!   schema is `docs/report.schema.json`); [`run::run_path`] does both, as
//!   the command line does, and writes the files of `scan … into`.
//! - Input errors are [`diagnostic::Error`]s with file, line and column.
//!
//! # The pipeline, public for tests and benchmarks
//!
//! The pipeline runs one way: [`syntax`] parses text to an AST, [`lower`]
//! checks it against the declarations ([`context`]) and produces [`term`]s,
//! [`normal`] puts terms in contact-term normal form, [`egraph`] runs the
//! Ward rules of [`rules`] on them; [`engine`] strings the stages together
//! for one expression, [`derive`] checks a derivation step by step, and
//! [`numeric`] evaluates on models. These modules are public so that the
//! integration tests and benchmarks can reach each stage; their items may
//! change between versions.

pub(crate) mod accept;
pub mod budget;
pub mod charset;
pub mod check;
pub mod context;
pub mod derive;
pub mod diagnostic;
pub mod egraph;
pub mod engine;
pub(crate) mod files;
pub mod help;
pub mod jobs;
pub mod lower;
pub mod normal;
pub mod numeric;
pub mod outcome;
pub mod plot;
pub mod report;
pub mod rules;
pub mod run;
pub mod syntax;
pub mod tabulate;
pub mod term;
