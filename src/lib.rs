//! wardsmith: a symbolic-numeric rewriting engine for conformal Ward
//! identity derivations.
//!
//! The pipeline runs one way: [`syntax`] parses text to an AST, [`lower`]
//! checks it against the declarations ([`context`]) and produces [`term`]s,
//! [`normal`] puts terms in contact-term normal form, [`egraph`] runs the
//! Ward rules of [`rules`] on them, and [`report`] prints the results.
//! [`engine`] strings the stages together for one expression; [`run`]
//! does one whole file for the command line.

pub mod accept;
pub mod budget;
pub mod charset;
pub mod check;
pub mod context;
pub mod derive;
pub mod diagnostic;
pub mod egraph;
pub mod engine;
pub mod files;
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
pub mod term;
