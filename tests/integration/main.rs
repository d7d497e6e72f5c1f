//! telltale's cross-crate integration tests: one binary, one module per area.
#![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]

mod backtest;
mod golden_changepoint;
mod golden_robust;
mod golden_trend_twosample;
mod io_files;
mod io_reader;
mod jobs_fit;
mod verdict;
