//! Compiling explicit terms to flat programs and evaluating them.
