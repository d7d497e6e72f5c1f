//! Writes one asset's readings in `[FROM, TO)` as a scoring request body
//! for `POST /v1/windows/score`, for `bench/serve_bench.sh`: JSON by
//! default; with `--arrow`, an Arrow IPC stream (columns `sensor` Utf8,
//! `ts` Timestamp(ms, UTC), `value` Float64, null for a missing reading),
//! to be sent with `?asset=ASSET&from=FROM&to=TO`.
//!
//! ```text
//! cargo run --release -p telltale --example serve_window -- HISTORY ASSET FROM TO > window.json
//! cargo run --release -p telltale --example serve_window -- HISTORY ASSET FROM TO --arrow > window.arrows
//! ```

use anyhow::{Context, bail};
use arrow_array::{ArrayRef, Float64Array, RecordBatch, StringArray, TimestampMillisecondArray};
use arrow_schema::{DataType, Field, Schema, TimeUnit};
use serde_json::{Value, json};
use std::io::Write;
use std::sync::Arc;
use telltale_pipelines::io::HistoryReader;
use telltale_pipelines::time::{format_time, from_millis, parse_time};

fn main() -> anyhow::Result<()> {
    let mut args: Vec<String> = std::env::args().skip(1).collect();
    let arrow = args.iter().any(|a| a == "--arrow");
    args.retain(|a| a != "--arrow");
    let [history, asset, from, to] = args.as_slice() else {
        bail!("usage: serve_window HISTORY ASSET FROM TO [--arrow]");
    };
    let ms = |s: &str| parse_time(s).map(|t| t.timestamp_millis()).map_err(anyhow::Error::msg);
    // (sensor, ts ms, value; NaN = missing), in the history's order
    let mut rows: Vec<(String, i64, f64)> = Vec::new();
    HistoryReader::try_new(history)?.with_time_range(ms(from)?, ms(to)?).for_each_asset(|h| {
        if &h.asset == asset {
            for s in &h.sensors {
                for (t, v) in s.ts_ms.iter().zip(&s.value) {
                    rows.push((s.sensor.clone(), *t, *v));
                }
            }
        }
        Ok::<(), telltale_pipelines::Error>(())
    })?;
    if rows.is_empty() {
        bail!("no readings of {asset} in [{from}, {to})");
    }
    let mut out = std::io::stdout().lock();
    if arrow {
        let schema = Arc::new(Schema::new(vec![
            Field::new("sensor", DataType::Utf8, false),
            Field::new("ts", DataType::Timestamp(TimeUnit::Millisecond, Some("UTC".into())), false),
            Field::new("value", DataType::Float64, true),
        ]));
        let sensor = StringArray::from_iter_values(rows.iter().map(|r| r.0.as_str()));
        let ts = TimestampMillisecondArray::from_iter_values(rows.iter().map(|r| r.1))
            .with_timezone("UTC");
        let value: Float64Array = rows.iter().map(|r| (!r.2.is_nan()).then_some(r.2)).collect();
        let cols: Vec<ArrayRef> = vec![Arc::new(sensor), Arc::new(ts), Arc::new(value)];
        let batch = RecordBatch::try_new(schema.clone(), cols).context("building the batch")?;
        let mut buf = Vec::new();
        let mut w = arrow_ipc::writer::StreamWriter::try_new(&mut buf, &schema)?;
        w.write(&batch)?;
        w.finish()?;
        drop(w);
        out.write_all(&buf).context("writing the window")?;
    } else {
        let readings: Vec<Value> = rows
            .iter()
            .map(|(s, t, v)| {
                let value = if v.is_nan() { Value::Null } else { json!(v) };
                json!({"sensor": s, "ts": format_time(from_millis(*t)), "value": value})
            })
            .collect();
        let body = json!({"asset": asset, "from": from, "to": to, "readings": readings});
        writeln!(out, "{}", serde_json::to_string(&body).context("writing the window")?)?;
    }
    Ok(())
}
