//! Read-throughput benchmark of the per-asset history reader.
//!
//! ```text
//! cargo run --release -p telltale-pipelines --example read_bench -- make FILE [ASSETS] [SENSORS] [ROWS_PER_SENSOR]
//! cargo run --release -p telltale-pipelines --example read_bench -- read FILE [auto|stream|spill] [BATCH_ROWS]
//! ```
//!
//! `make` writes a pumping-station history with `HistoryWriter` (assets in
//! sorted order, one reading every 10 s). `read` hands every asset to a
//! callback that touches its values, and prints one JSON line with rows/s and
//! the peak resident set size (VmHWM from /proc/self/status). bench/read_bench.py
//! runs it side by side with pyarrow and polars.

use std::time::Instant;
use telltale_pipelines::io::{HistoryReader, HistoryWriter, HistoryWriterOptions, ReadStrategy};

fn vm_hwm_mib() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1).and_then(|kb| kb.parse::<f64>().ok()))
        })
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

fn arg<T: std::str::FromStr>(args: &[String], i: usize, default: T) -> T {
    args.get(i).and_then(|s| s.parse().ok()).unwrap_or(default)
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let usage = "usage: read_bench make FILE [ASSETS] [SENSORS] [ROWS_PER_SENSOR] | read FILE [auto|stream|spill] [BATCH_ROWS]";
    let (cmd, path) = match (args.get(1), args.get(2)) {
        (Some(c), Some(p)) => (c.as_str(), p.clone()),
        _ => return Err(usage.into()),
    };
    match cmd {
        "make" => {
            let assets: usize = arg(&args, 3, 1000);
            let sensors: usize = arg(&args, 4, 6);
            let n: usize = arg(&args, 5, 8640);
            let names = [
                "bearing_de",
                "bearing_nde",
                "discharge_p",
                "flow",
                "motor_current",
                "speed",
                "suction_p",
                "vibration",
            ];
            let mut w = HistoryWriter::try_new(&path, HistoryWriterOptions::default())?;
            let t0: i64 = 1_767_225_600_000; // 2026-01-01T00:00:00Z
            let ts: Vec<i64> = (0..n as i64).map(|k| t0 + k * 10_000).collect();
            let mut state: u64 = 42;
            let mut values = vec![0.0f64; n];
            for a in 0..assets {
                let site = ["north", "south", "east", "west"][a % 4];
                let asset = format!("{site}-b{a:05}");
                for s in names.iter().take(sensors) {
                    // xorshift noise around a level: deterministic, incompressible enough to be honest
                    let level = 20.0 + (a % 50) as f64;
                    for v in values.iter_mut() {
                        state ^= state << 13;
                        state ^= state >> 7;
                        state ^= state << 17;
                        *v = level + (state >> 11) as f64 / (1u64 << 53) as f64;
                    }
                    w.write_series(&asset, s, &ts, &values)?;
                }
            }
            let rows = w.close()?;
            println!("{{\"wrote\":{rows},\"file\":\"{path}\"}}");
        }
        "read" => {
            let strategy = match args.get(3).map(String::as_str) {
                Some("stream") => ReadStrategy::Stream,
                Some("spill") => ReadStrategy::Spill,
                _ => ReadStrategy::Auto,
            };
            let start = Instant::now();
            let mut rows = 0usize;
            let mut checksum = 0.0f64;
            let mut max_asset_rows = 0usize;
            let summary =
                HistoryReader::try_new(&path)?.with_strategy(strategy).for_each_asset(|a| {
                    let n = a.rows();
                    rows += n;
                    max_asset_rows = max_asset_rows.max(n);
                    for s in &a.sensors {
                        checksum += s.value.iter().filter(|v| !v.is_nan()).sum::<f64>();
                    }
                    Ok::<(), telltale_pipelines::Error>(())
                })?;
            let secs = start.elapsed().as_secs_f64();
            println!(
                "{{\"tool\":\"telltale HistoryReader::for_each_asset\",\"rows\":{rows},\"seconds\":{secs:.3},\
                 \"rows_per_s\":{:.0},\"peak_rss_mib\":{:.1},\"assets\":{},\"max_asset_rows\":{max_asset_rows},\
                 \"plan\":\"{:?}\",\"checksum\":{checksum:.6e}}}",
                rows as f64 / secs,
                vm_hwm_mib(),
                summary.assets.len(),
                summary.plan
            );
        }
        _ => return Err(usage.into()),
    }
    Ok(())
}
