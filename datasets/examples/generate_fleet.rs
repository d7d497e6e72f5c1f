//! Generate a preset fleet and print what was written and how fast.
//!
//! ```text
//! cargo run --release -p telltale-datasets --example generate_fleet -- demo /tmp/demo
//! ```

use std::process::ExitCode;
use telltale_datasets::{FleetParams, generate_fleet};

fn main() -> ExitCode {
    let mut args = std::env::args().skip(1);
    let preset = args.next().unwrap_or_else(|| "small".into());
    let out = args.next().unwrap_or_else(|| format!("target/fleet-{preset}"));
    let params = match preset.as_str() {
        "demo" => FleetParams::demo(),
        "small" => FleetParams::small(),
        "benchmark" => FleetParams::benchmark(),
        other => {
            eprintln!("unknown preset {other:?}; use demo, small or benchmark");
            return ExitCode::from(2);
        }
    };
    let params = match params.check() {
        Ok(p) => p,
        Err(e) => {
            eprintln!("error: {e}");
            return ExitCode::from(2);
        }
    };
    match generate_fleet(&params, &out) {
        Ok(s) => {
            let secs = s.elapsed.as_secs_f64();
            eprintln!(
                "{preset}: {} assets, {} rows, {} events, {} outages in {secs:.2} s ({:.2} M rows/s)",
                s.assets.len(),
                s.rows,
                s.events.len(),
                s.outages.len(),
                s.rows as f64 / secs / 1e6
            );
            eprintln!(
                "fit {} .. {}  control .. {}  scan {} .. {}",
                s.timeline.fit.start,
                s.timeline.fit.end,
                s.timeline.control.end,
                s.timeline.scan.start,
                s.timeline.scan.end
            );
            eprintln!("clean assets: {}", s.clean_assets.join(" "));
            eprintln!("history: {}", s.history.display());
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(1)
        }
    }
}
