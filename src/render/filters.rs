//! Template filters legwork adds to tera: they live in [`crate::text`], which the
//! campaign loader uses too (to parse templates with the same filters) without
//! depending on the tree writer.

pub use crate::text::{quote_word, register_filters};
