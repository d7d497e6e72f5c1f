//! telltale's cross-crate integration tests: one binary, one module per area.

mod golden_changepoint;
mod golden_robust;
mod golden_trend_twosample;
mod io_files;
mod io_reader;
