//! Writes one asset's readings in `[FROM, TO)` as a scoring request body
//! for `POST /v1/windows/score` (JSON), for `bench/serve_bench.sh`.
//!
//! ```text
//! cargo run --release -p telltale --example serve_window -- HISTORY ASSET FROM TO > window.json
//! ```

use anyhow::{Context, bail};
use serde_json::{Value, json};
use telltale_pipelines::io::HistoryReader;
use telltale_pipelines::time::{format_time, from_millis, parse_time};

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let [history, asset, from, to] = args.as_slice() else {
        bail!("usage: serve_window HISTORY ASSET FROM TO");
    };
    let ms = |s: &str| parse_time(s).map(|t| t.timestamp_millis()).map_err(anyhow::Error::msg);
    let mut readings = Vec::new();
    HistoryReader::try_new(history)?.with_time_range(ms(from)?, ms(to)?).for_each_asset(|h| {
        if &h.asset == asset {
            for s in &h.sensors {
                for (t, v) in s.ts_ms.iter().zip(&s.value) {
                    let value = if v.is_nan() { Value::Null } else { json!(v) };
                    readings.push(json!({"sensor": s.sensor, "ts": format_time(from_millis(*t)), "value": value}));
                }
            }
        }
        Ok::<(), telltale_pipelines::Error>(())
    })?;
    if readings.is_empty() {
        bail!("no readings of {asset} in [{from}, {to})");
    }
    let body = json!({"asset": asset, "from": from, "to": to, "readings": readings});
    println!("{}", serde_json::to_string(&body).context("writing the window")?);
    Ok(())
}
