//! `telltale backtest` replay: no look-ahead across folds and review steps.

use arrow_array::{Array, Float64Array, RecordBatch, TimestampMillisecondArray};
use parquet::arrow::ArrowWriter;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use std::path::Path;
use std::sync::Arc;
use telltale_datasets::{FleetParams, generate_fleet};
use telltale_pipelines::jobs::{BacktestSettings, Replay, Reported, run_replay};

const HOUR: i64 = 3_600_000;
const DAY: i64 = 24 * HOUR;

/// Copies the history, replacing each value `v` at `ts > cut` by `f(v)`.
fn altered_copy(src: &Path, dst: &Path, cut: i64, f: impl Fn(f64) -> f64) -> usize {
    let file = std::fs::File::open(src).unwrap();
    let reader = ParquetRecordBatchReaderBuilder::try_new(file).unwrap().build().unwrap();
    let mut writer: Option<ArrowWriter<std::fs::File>> = None;
    let mut changed = 0;
    for batch in reader {
        let batch = batch.unwrap();
        let schema = batch.schema();
        let ts_i = schema.index_of("ts").unwrap();
        let v_i = schema.index_of("value").unwrap();
        let ts = batch.column(ts_i).as_any().downcast_ref::<TimestampMillisecondArray>().unwrap();
        let v = batch.column(v_i).as_any().downcast_ref::<Float64Array>().unwrap();
        let new: Float64Array = (0..v.len())
            .map(|i| {
                if v.is_null(i) {
                    None
                } else if ts.value(i) > cut {
                    changed += 1;
                    Some(f(v.value(i)))
                } else {
                    Some(v.value(i))
                }
            })
            .collect();
        let mut cols = batch.columns().to_vec();
        cols[v_i] = Arc::new(new);
        let out = RecordBatch::try_new(schema.clone(), cols).unwrap();
        writer
            .get_or_insert_with(|| {
                ArrowWriter::try_new(std::fs::File::create(dst).unwrap(), schema.clone(), None)
                    .unwrap()
            })
            .write(&out)
            .unwrap();
    }
    writer.unwrap().close().unwrap();
    changed
}

fn decided_by(r: &Replay, t: i64) -> Vec<&Reported> {
    r.candidates.iter().filter(|c| c.reported.timestamp_millis() <= t).collect()
}

#[test]
fn backtest_decisions_do_not_depend_on_later_data() {
    // DESIGN 4.4 `detected` and the backtest's contract: every decision made
    // at or before t uses only data up to t. Six pumps over 14 days at
    // 5-minute samples; fits on the trailing 4 days, re-fit every 2 days,
    // one decision per 12 h step. The history after t is replaced (+30 %
    // and +5 on every reading), which must change nothing decided by t: not
    // the suspicions, their scores and adjusted p-values, nor the folds'
    // fitting before t.
    let dir = tempfile::tempdir().unwrap();
    let params =
        FleetParams::small().sites(2).pumps_per_site(3).days(14).fit_days(4).check().unwrap();
    let summary = generate_fleet(&params, dir.path()).unwrap();
    let start = params.start().timestamp_millis();
    let settings = |history: &Path, work: &str| {
        let mut s = BacktestSettings::new(history, summary.events.clone(), dir.path().join(work));
        s.registry = Some(summary.registry.clone());
        s.from_ms = Some(start + 4 * DAY);
        s.to_ms = Some(start + 14 * DAY);
        s.fit_window_ms = 4 * DAY;
        s.min_fit_ms = 2 * DAY;
        s.refit_every_ms = 2 * DAY;
        s.step_ms = 12 * HOUR;
        s.threads = 2;
        s
    };
    let base = run_replay(&settings(&summary.history, "base")).unwrap();
    assert_eq!(base.folds.len(), 5);
    for cut in [start + 7 * DAY + 5 * HOUR, start + 10 * DAY] {
        let altered = dir.path().join(format!("altered-{cut}.parquet"));
        let n = altered_copy(&summary.history, &altered, cut, |v| 1.3 * v + 5.0);
        assert!(n > 0, "nothing after the cut was altered");
        let got = run_replay(&settings(&altered, &format!("alt-{cut}"))).unwrap();
        let want = decided_by(&base, cut);
        assert!(!want.is_empty(), "no decision by the cut: the check would be empty");
        assert_eq!(decided_by(&got, cut), want, "decisions by the cut changed");
        for (a, b) in base.folds.iter().zip(&got.folds) {
            if a.start.timestamp_millis() <= cut {
                assert_eq!(
                    (a.fitted, a.carried, a.paused),
                    (b.fitted, b.carried, b.paused),
                    "fold {} fitted differently",
                    a.fold
                );
            }
        }
        let after = |r: &Replay| -> Vec<Reported> {
            r.candidates.iter().filter(|c| c.reported.timestamp_millis() > cut).cloned().collect()
        };
        eprintln!(
            "cut at day {}: {} decisions before, {} / {} after",
            (cut - start) / DAY,
            want.len(),
            after(&base).len(),
            after(&got).len()
        );
        assert_ne!(after(&base), after(&got), "the alteration changed nothing after the cut");
    }
}
