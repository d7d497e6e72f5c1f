//! Criterion benchmarks (placeholder until its owner fills it).
#![allow(missing_docs)]
fn main() {}
