//! The history reader against pyarrow's own reading of the committed fixtures
//! (tests/fixtures/make_fixtures.py; pyarrow version in tests/fixtures/manifest.json).

use serde_json::Value;
use std::collections::BTreeMap;
use std::path::PathBuf;
use telltale_pipelines::io::{HistoryReader, ReadPlan, ReadStrategy};

fn fixtures() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("fixtures")
}

#[expect(clippy::unwrap_used, reason = "test helper")]
fn manifest() -> Value {
    let text = std::fs::read_to_string(fixtures().join("manifest.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

type Got = BTreeMap<String, BTreeMap<String, (Vec<i64>, Vec<Option<f64>>, Vec<bool>)>>;

#[expect(clippy::unwrap_used, reason = "test helper")]
fn read_all(reader: &HistoryReader) -> (Got, telltale_pipelines::io::ReadSummary) {
    let mut got = Got::new();
    let summary = reader
        .for_each_asset(|a| {
            let e = got.entry(a.asset.clone()).or_default();
            assert!(e.is_empty(), "asset {} handed out twice", a.asset);
            for s in a.sensors {
                let v = s.value.iter().map(|x| (!x.is_nan()).then_some(*x)).collect();
                e.insert(s.sensor.clone(), (s.ts_ms, v, s.good));
            }
            Ok::<(), telltale_pipelines::Error>(())
        })
        .unwrap();
    (got, summary)
}

#[expect(clippy::unwrap_used, reason = "test helper")]
fn expected(entry: &Value) -> Got {
    let mut want = Got::new();
    for (asset, sensors) in entry["expect"].as_object().unwrap() {
        for (sensor, s) in sensors.as_object().unwrap() {
            let ts = s["ts_ms"].as_array().unwrap().iter().map(|x| x.as_i64().unwrap()).collect();
            let v = s["value"].as_array().unwrap().iter().map(Value::as_f64).collect();
            let g = s["good"].as_array().unwrap().iter().map(|x| x.as_bool().unwrap()).collect();
            want.entry(asset.clone()).or_default().insert(sensor.clone(), (ts, v, g));
        }
    }
    want
}

/// Source: pyarrow.parquet.read_table of each fixture plus pandas'
/// stable sort / drop_duplicates(keep="last") (versions in the manifest).
#[test]
fn every_accepted_type_combination_matches_pyarrow() {
    let m = manifest();
    let good = m["good"].as_array().unwrap();
    assert!(good.len() >= 25, "fixtures missing; run tests/fixtures/make_fixtures.py");
    for entry in good {
        let path = fixtures().join(entry["file"].as_str().unwrap());
        for strategy in [ReadStrategy::Auto, ReadStrategy::Stream, ReadStrategy::Spill] {
            let reader =
                HistoryReader::try_new(&path).unwrap().with_strategy(strategy).with_batch_size(5);
            let (got, summary) = read_all(&reader);
            assert_eq!(got, expected(entry), "{} with {strategy:?}", path.display());
            assert_eq!(
                summary.rows_in_range,
                entry["rows"].as_u64().unwrap(),
                "{}",
                path.display()
            );
            if strategy == ReadStrategy::Spill {
                assert!(matches!(summary.plan, ReadPlan::Spill { .. }));
            }
        }
    }
}

/// Source: the same pyarrow reading; the hive tree's later path overrides the
/// earlier one for the same (asset, sensor, ts) (DESIGN.md 4.1 last-wins rule).
#[test]
fn hive_tree_is_read_in_path_order_and_later_files_win() {
    let dir = fixtures().join("history/hive");
    let reader = HistoryReader::try_new(&dir).unwrap();
    assert_eq!(reader.files().len(), 3, "_SUCCESS and folders are not data");
    let (got, _) = read_all(&reader);
    let b1 = &got["north-b1"]["flow"];
    // part-1 rewrote every reading from T0+2 min with +1000
    assert!(b1.1[2].unwrap() > 1000.0 && b1.1[1].unwrap() < 1000.0, "{b1:?}");
}

#[expect(clippy::unwrap_used, reason = "test helper")]
fn read_err(name: &str) -> String {
    let path = fixtures().join("history/bad").join(name);
    let reader = HistoryReader::try_new(&path).unwrap();
    let err = reader.for_each_asset(|_| Ok::<(), telltale_pipelines::Error>(())).unwrap_err();
    assert!(err.is_bad_input(), "{name}: {err}");
    let msg = format!("{err:#}");
    assert!(msg.contains(name), "error names the file: {msg}");
    msg
}

#[test]
fn bad_files_get_clear_errors_naming_file_and_field() {
    assert!(read_err("missing_value.parquet").contains("missing column `value`"));
    assert!(read_err("value_string.parquet").contains("column `value` has type Utf8"));
    assert!(read_err("truncated.parquet").contains("truncated or corrupt"));
    assert!(read_err("empty.parquet").contains("0 bytes"));
    let m = read_err("binary_ids.parquet");
    assert!(m.contains("column `asset` has type Binary"), "{m}");
    let m = read_err("invalid_utf8_ids.parquet");
    assert!(m.contains("row group 0") && m.to_lowercase().contains("utf"), "{m}");
    let m = read_err("ts_ns_extreme.parquet");
    assert!(m.contains("row 1 (1-based") && m.contains("column `ts`") && m.contains("unit"), "{m}");
    let m = read_err("ts_s_year300000.parquet");
    assert!(m.contains("column `ts`") && m.contains("outside 1900-01-01..2200-01-01"), "{m}");
}

#[test]
fn zero_row_file_is_empty_not_bad() {
    let reader = HistoryReader::try_new(fixtures().join("history/bad/zero_rows.parquet")).unwrap();
    let (got, summary) = read_all(&reader);
    assert!(got.is_empty());
    assert_eq!(summary.rows_decoded, 0);
}

#[test]
fn skip_bad_files_lists_every_unreadable_file_and_keeps_the_rest() {
    let dir = fixtures().join("history/bad");
    let reader = HistoryReader::try_new(&dir).unwrap().with_skip_bad_files(true);
    let (got, summary) = read_all(&reader);
    let mut names: Vec<String> = summary
        .bad_files
        .iter()
        .map(|b| b.path.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "binary_ids.parquet",
            "empty.parquet",
            "invalid_utf8_ids.parquet",
            "missing_value.parquet",
            "truncated.parquet",
            "ts_ns_extreme.parquet",
            "ts_s_year300000.parquet",
            "value_string.parquet"
        ]
    );
    assert!(summary.bad_files.iter().all(|b| !b.reason.is_empty()));
    assert!(got.is_empty(), "only zero_rows.parquet is readable and it has no rows");
    // without skipping, the same directory fails
    let strict = HistoryReader::try_new(&dir).unwrap();
    assert!(strict.for_each_asset(|_| Ok::<(), telltale_pipelines::Error>(())).is_err());
}

#[test]
fn inventory_matches_pyarrow_counts() {
    // Source: row counts per (asset, sensor) of pyarrow's reading, before dedup = manifest rows.
    let m = manifest();
    for entry in m["good"].as_array().unwrap() {
        let path = fixtures().join(entry["file"].as_str().unwrap());
        let inv = HistoryReader::try_new(&path).unwrap().inventory().unwrap();
        assert_eq!(inv.rows, entry["rows"].as_u64().unwrap());
        let want = expected(entry);
        assert_eq!(inv.asset_ids(), want.keys().map(String::as_str).collect::<Vec<_>>());
        for a in &inv.assets {
            let ws: Vec<&String> = want[&a.asset].keys().collect();
            let gs: Vec<&String> = a.sensors.iter().map(|s| &s.sensor).collect();
            assert_eq!(gs, ws);
            for s in &a.sensors {
                let w = &want[&a.asset][&s.sensor].0;
                assert_eq!((s.first_ms, s.last_ms), (w[0], *w.last().unwrap()));
            }
        }
    }
}
