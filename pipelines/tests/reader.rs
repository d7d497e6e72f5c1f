//! Reader invariants on files written by `HistoryWriter`: write→read identity,
//! clustered vs shuffled layouts, time-range pruning and last-wins order.

use proptest::prelude::*;
use std::collections::BTreeMap;
use std::path::Path;
use std::sync::Arc;
use telltale_pipelines::io::{
    AssetHistory, AssetIndex, HistoryReader, HistoryWriter, HistoryWriterOptions, ReadPlan,
    ReadStrategy,
};

type Series = BTreeMap<(String, String), Vec<(i64, u64, bool)>>;

#[expect(clippy::unwrap_used, reason = "test helper")]
fn collect(r: &HistoryReader) -> (Series, telltale_pipelines::io::ReadSummary) {
    let mut out = Series::new();
    let s = r
        .for_each_asset(|a: AssetHistory| {
            for s in &a.sensors {
                let rows = s
                    .ts_ms
                    .iter()
                    .zip(&s.value)
                    .zip(&s.good)
                    .map(|((t, v), g)| (*t, v.to_bits(), *g));
                assert!(out.insert((a.asset.clone(), s.sensor.clone()), rows.collect()).is_none());
            }
            Ok::<(), telltale_pipelines::Error>(())
        })
        .unwrap();
    (out, s)
}

/// The obvious model of DESIGN.md 4.1: sort each (asset, sensor) by ts with a
/// stable sort over input order and keep the last of each ts (common practice, no source).
fn model(rows: &[(String, String, i64, f64)], from: i64, until: i64) -> Series {
    let mut m: BTreeMap<(String, String), BTreeMap<i64, f64>> = BTreeMap::new();
    for (a, s, t, v) in rows {
        if (from..until).contains(t) {
            m.entry((a.clone(), s.clone())).or_default().insert(*t, *v); // later rows overwrite
        }
    }
    m.into_iter()
        .map(|(k, v)| {
            (
                k,
                v.into_iter()
                    .map(|(t, x)| {
                        (t, if x.is_nan() { f64::NAN.to_bits() } else { x.to_bits() }, true)
                    })
                    .collect(),
            )
        })
        .collect()
}

#[expect(clippy::unwrap_used, reason = "test helper")]
fn write(path: &Path, rows: &[(String, String, i64, f64)], rg: usize) {
    let mut w =
        HistoryWriter::try_new(path, HistoryWriterOptions { row_group_rows: rg, batch_rows: 3 })
            .unwrap();
    for (a, s, t, v) in rows {
        w.write_series(a, s, &[*t], &[*v]).unwrap();
    }
    w.close().unwrap();
}

fn fleet(n_assets: usize, n: i64) -> Vec<(String, String, i64, f64)> {
    let mut rows = Vec::new();
    for a in 0..n_assets {
        for s in ["flow", "bearing_de", "speed"] {
            for k in 0..n {
                rows.push((
                    format!("pump-{a:02}"),
                    s.to_owned(),
                    1_000_000 + k * 60_000,
                    (a * 100) as f64 + k as f64,
                ));
            }
        }
    }
    rows
}

#[test]
fn clustered_and_shuffled_give_identical_assets() {
    let dir = tempfile::tempdir().unwrap();
    let rows = fleet(12, 200); // 7200 rows, more than the 64 KiB budget holds
    write(&dir.path().join("sorted.parquet"), &rows, 50);
    let mut shuffled = rows.clone();
    // deterministic shuffle: a fixed multiplicative permutation (common practice, no source)
    let n = shuffled.len();
    let perm: Vec<usize> = (0..n).map(|i| (i * 7919) % n).collect();
    shuffled = perm.iter().map(|&i| rows[i].clone()).collect();
    write(&dir.path().join("shuffled.parquet"), &shuffled, 50);
    let want = model(&rows, i64::MIN, i64::MAX);
    // a tiny budget forces the planner to use its index (sorted) or spill (shuffled)
    let budget = 64 << 10;
    let r = HistoryReader::try_new(dir.path().join("sorted.parquet"))
        .unwrap()
        .with_memory_budget(budget);
    let (got, s) = collect(&r);
    assert_eq!(got, want);
    assert_eq!(s.plan, ReadPlan::Stream { index: AssetIndex::Statistics });
    assert!(
        s.peak_buffered_rows <= 2 * 600 + 50,
        "sorted input streams a few assets at a time: {}",
        s.peak_buffered_rows
    );
    let r = HistoryReader::try_new(dir.path().join("shuffled.parquet"))
        .unwrap()
        .with_memory_budget(budget);
    let (got, s) = collect(&r);
    assert_eq!(got, want);
    assert!(matches!(s.plan, ReadPlan::Spill { buckets } if buckets > 1), "{:?}", s.plan);
    // clustered but not sorted by id (pump-00, -03, -06, .., -01, -04, ..):
    // row-group id ranges overlap, so the planner decodes the asset column
    let mut reversed = rows.clone();
    let key = |id: &str| {
        let n: usize = id.trim_start_matches("pump-").parse().unwrap();
        (n % 3, n)
    };
    reversed.sort_by_key(|r| key(&r.0)); // stable: sensors and times keep their order
    // 70-row groups straddle assets, so their id ranges span several ids
    write(&dir.path().join("reversed.parquet"), &reversed, 70);
    let r = HistoryReader::try_new(dir.path().join("reversed.parquet"))
        .unwrap()
        .with_memory_budget(budget);
    let (got, s) = collect(&r);
    assert_eq!(got, want);
    assert_eq!(s.plan, ReadPlan::Stream { index: AssetIndex::Decoded });
    assert!(s.peak_buffered_rows <= 2 * 600 + 70, "{}", s.peak_buffered_rows);
    std::fs::remove_file(dir.path().join("reversed.parquet")).unwrap();
    for strategy in [ReadStrategy::Stream, ReadStrategy::Spill] {
        let r = HistoryReader::try_new(dir.path())
            .unwrap()
            .with_strategy(strategy)
            .with_memory_budget(budget);
        // both files hold the same readings, so the merged directory reads as one file
        let (got, _) = collect(&r);
        assert_eq!(got, want, "{strategy:?}");
    }
}

#[test]
fn time_range_prunes_row_groups_and_keeps_exactly_the_rows_in_range() {
    let dir = tempfile::tempdir().unwrap();
    // one asset, one sensor, in time order: row groups of 10 rows cover disjoint times
    let rows: Vec<_> =
        (0..100).map(|k| ("p".to_owned(), "flow".to_owned(), k * 1000, k as f64)).collect();
    let p = dir.path().join("h.parquet");
    write(&p, &rows, 10);
    let (from, until) = (25_000, 61_000);
    let r = HistoryReader::try_new(&p).unwrap().with_time_range(from, until);
    let (got, s) = collect(&r);
    assert_eq!(got, model(&rows, from, until));
    assert_eq!(s.row_groups, 10);
    assert_eq!(
        s.row_groups_pruned, 5,
        "only groups 2..=6 ([20 s, 29 s] .. [60 s, 69 s]) overlap [25 s, 61 s)"
    );
    assert_eq!(s.row_groups_read, 5);
    assert_eq!(s.rows_in_range, 36);
}

#[test]
fn last_wins_within_a_file_and_across_files() {
    let dir = tempfile::tempdir().unwrap();
    let a = |t, v: f64| ("p".to_owned(), "flow".to_owned(), t, v);
    write(&dir.path().join("a.parquet"), &[a(3, 1.0), a(1, 2.0), a(3, 3.0), a(2, 4.0)], 2);
    write(&dir.path().join("b.parquet"), &[a(2, 5.0), a(4, 6.0), a(2, 7.0)], 2);
    for strategy in [ReadStrategy::Auto, ReadStrategy::Spill] {
        let r = HistoryReader::try_new(dir.path()).unwrap().with_strategy(strategy);
        let (got, s) = collect(&r);
        let v: Vec<(i64, f64)> = got[&("p".into(), "flow".into())]
            .iter()
            .map(|(t, v, _)| (*t, f64::from_bits(*v)))
            .collect();
        assert_eq!(v, [(1, 2.0), (2, 7.0), (3, 3.0), (4, 6.0)], "{strategy:?}");
        assert_eq!(s.duplicates_dropped, 3);
    }
}

#[test]
fn callback_error_stops_the_read_and_is_returned() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("h.parquet");
    write(&p, &fleet(3, 5), 5);
    let mut seen = 0;
    let e = HistoryReader::try_new(&p)
        .unwrap()
        .with_memory_budget(1 << 16)
        .for_each_asset(|_| {
            seen += 1;
            Err(telltale_pipelines::Error::bad_input("job", "stop here"))
        })
        .unwrap_err();
    assert_eq!(seen, 1);
    assert!(e.to_string().contains("stop here"), "{e}");
}

fn _assert_send_sync() {
    fn is<T: Send + Sync>() {}
    is::<HistoryReader>();
    is::<AssetHistory>();
    let _ = Arc::new(0);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]
    #[test]
    fn write_then_read_is_the_identity_up_to_sort_and_last_wins(
        rows in prop::collection::vec((0u8..4, 0u8..3, -5i64..40, prop_oneof![4 => -1e6f64..1e6, 1 => Just(f64::NAN)]), 1..200),
        rg in 1usize..40,
        spill in any::<bool>(),
    ) {
        let rows: Vec<_> = rows.into_iter().map(|(a, s, t, v)| (format!("a{a}"), format!("s{s}"), t * 1000, v)).collect();
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("h.parquet");
        write(&p, &rows, rg);
        let strategy = if spill { ReadStrategy::Spill } else { ReadStrategy::Auto };
        let r = HistoryReader::try_new(&p).unwrap().with_strategy(strategy).with_memory_budget(1 << 16);
        let (got, _) = collect(&r);
        prop_assert_eq!(got, model(&rows, i64::MIN, i64::MAX));
    }
}
