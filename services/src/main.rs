//! The `telltale` binary.
fn main() {}
