//! Shared helpers for telltale's cross-crate integration tests.
