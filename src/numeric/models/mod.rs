//! Models: correlators as explicit terms.
