//! The fit job in process: one file per asset, re-fitting one asset alone,
//! and equality with a direct models fit on the same data (the job adds no
//! statistics; the statistics themselves are checked against scipy,
//! statsmodels and scikit-learn in the models crate's tests).

use std::path::{Path, PathBuf};
use telltale_datasets::{FleetParams, generate_fleet};
use telltale_models::ParamGuard;
use telltale_models::baseline::{AssetBaseline, SensorRole, SensorSeries, SensorSpec};
use telltale_pipelines::io::{HistoryReader, HistoryWriter, HistoryWriterOptions};
use telltale_pipelines::jobs::{
    FailureKind, FitOutcome, FitSettings, Store, TrainingChunks, run_fit,
};
use telltale_pipelines::registry::{Registry, Role};

/// A three-pump fleet (one station) and its fit end, epoch ms.
fn small_fleet(dir: &Path) -> (PathBuf, PathBuf, i64) {
    let params = FleetParams::small().sites(1).pumps_per_site(3).check().unwrap();
    let summary = generate_fleet(&params, dir).unwrap();
    (summary.history, summary.registry, summary.timeline.fit.end.timestamp_millis())
}

fn settings(history: &Path, registry: &Path, until: i64, store: &Path) -> FitSettings {
    let mut s = FitSettings::new(history, until, store);
    s.registry = Some(registry.to_path_buf());
    s.threads = 2;
    s
}

#[test]
fn one_file_per_asset_and_refitting_one_asset_rewrites_only_its_file() {
    let dir = tempfile::tempdir().unwrap();
    let (history, registry, until) = small_fleet(&dir.path().join("fleet"));
    let store_dir = dir.path().join("store");
    let report = run_fit(&settings(&history, &registry, until, &store_dir)).unwrap();
    assert_eq!(report.outcome(), FitOutcome::Complete);
    assert_eq!(report.assets_fitted.len(), 3, "{:?}", report.assets_failed);
    let store = Store::open(&store_dir).unwrap();
    let assets = store.list().unwrap();
    assert_eq!(assets.len(), 3);
    let manifest = store.manifest().unwrap();
    assert_eq!(manifest.assets.iter().map(|e| e.asset.clone()).collect::<Vec<_>>(), assets);

    let snapshot = |a: &str| {
        let p = store.baseline_path(a);
        let m = std::fs::metadata(&p).unwrap();
        #[cfg(unix)]
        let ino = std::os::unix::fs::MetadataExt::ino(&m);
        #[cfg(not(unix))]
        let ino = 0u64;
        (std::fs::read(&p).unwrap(), m.modified().unwrap(), ino)
    };
    let before: Vec<_> = assets.iter().map(|a| snapshot(a)).collect();
    let first_written = manifest.entry(&assets[1]).unwrap().written.clone();

    // re-fit the second asset alone
    std::thread::sleep(std::time::Duration::from_millis(20));
    let mut one = settings(&history, &registry, until, &store_dir);
    one.assets = vec![assets[1].clone()];
    let again = run_fit(&one).unwrap();
    assert_eq!(again.assets_fitted.len(), 1);
    assert_eq!(again.assets_fitted[0].asset, assets[1]);

    for (i, a) in assets.iter().enumerate() {
        let (bytes, mtime, ino) = snapshot(a);
        if i == 1 {
            // same data, same fit: same bytes, but a new file renamed into place
            assert_eq!(bytes, before[i].0);
            #[cfg(unix)]
            assert_ne!(ino, before[i].2, "{a} was not rewritten");
            assert_ne!(mtime, before[i].1, "{a} was not rewritten");
        } else {
            assert_eq!(
                (&bytes, mtime, ino),
                (&before[i].0, before[i].1, before[i].2),
                "{a} touched"
            );
        }
    }
    let m2 = store.manifest().unwrap();
    assert_eq!(m2.assets.len(), 3, "other assets stay in the manifest");
    assert_eq!(m2.entry(&assets[0]), manifest.entry(&assets[0]));
    assert_ne!(m2.entry(&assets[1]).unwrap().written, first_written);

    // an asset the span does not hold is bad input naming it
    one.assets = vec!["no-such-pump".into()];
    let e = run_fit(&one).unwrap_err();
    assert!(e.is_bad_input() && e.to_string().contains("no-such-pump"), "{e}");
}

#[test]
fn stored_baseline_equals_a_direct_models_fit() {
    let dir = tempfile::tempdir().unwrap();
    let (history, registry_path, until) = small_fleet(&dir.path().join("fleet"));
    let store_dir = dir.path().join("store");
    let mut s = settings(&history, &registry_path, until, &store_dir);
    s.threads = 1; // the sequential path; the other test runs the parallel one
    run_fit(&s).unwrap();
    let store = Store::open(&store_dir).unwrap();

    // The same data, through the reader and the registry by hand, then the models' fit.
    let registry = Registry::load(&registry_path).unwrap();
    let mut checked = 0;
    HistoryReader::try_new(&history)
        .unwrap()
        .with_time_range(i64::MIN, until)
        .for_each_asset(|a| {
            let spec = registry.asset(&a.asset).unwrap();
            let group = &registry.groups[&spec.group];
            let series: Vec<SensorSeries<'_>> = a
                .sensors
                .iter()
                .map(|s| {
                    let r = group.sensors.iter().find(|g| g.id == s.sensor).unwrap();
                    SensorSeries {
                        ts_ms: &s.ts_ms,
                        values: &s.value,
                        good: &s.good,
                        spec: SensorSpec {
                            role: match r.role {
                                Role::Context => SensorRole::Context,
                                Role::Condition => SensorRole::Condition,
                            },
                            range: r.range.map(|(lo, hi)| [lo, hi]),
                            band: r.band.map(|(lo, hi)| [lo, hi]),
                        },
                    }
                })
                .collect();
            let stored = store.read_baseline(&a.asset).unwrap();
            // the fit job trains on the even chunks of the span (the odd ones
            // calibrate the scan): the same split by hand
            let first =
                series.iter().filter_map(|s| s.usable().next().map(|(t, _)| t)).min().unwrap();
            let last =
                series.iter().filter_map(|s| s.usable().last().map(|(t, _)| t)).max().unwrap();
            let end = (last + 1).min(until);
            let chunks = TrainingChunks::new(first, end, 3_600_000);
            let kept: Vec<(Vec<i64>, Vec<f64>, Vec<bool>)> = series
                .iter()
                .map(|s| {
                    let keep: Vec<usize> =
                        (0..s.ts_ms.len()).filter(|&i| chunks.trains(s.ts_ms[i])).collect();
                    (
                        keep.iter().map(|&i| s.ts_ms[i]).collect(),
                        keep.iter().map(|&i| s.values[i]).collect(),
                        keep.iter().map(|&i| s.good[i]).collect(),
                    )
                })
                .collect();
            let train: Vec<SensorSeries<'_>> = series
                .iter()
                .zip(&kept)
                .map(|(s, k)| SensorSeries { ts_ms: &k.0, values: &k.1, good: &k.2, spec: s.spec })
                .collect();
            let direct = AssetBaseline::params()
                .check()
                .unwrap()
                .fit(&train, Some(first), Some(end))
                .unwrap();
            assert!(stored.calibration.is_some(), "{}: the fit stores a calibration", a.asset);
            assert_eq!(
                serde_json::to_value(&stored.baseline).unwrap(),
                serde_json::to_value(&direct).unwrap(),
                "{}",
                a.asset
            );
            // the file on disk deserialises to exactly the fitted value
            assert_eq!(stored.baseline, direct, "{}", a.asset);
            let ids: Vec<&str> = stored.sensors.iter().map(|s| s.id.as_str()).collect();
            let want: Vec<&str> = a.sensors.iter().map(|s| s.sensor.as_str()).collect();
            assert_eq!(ids, want);
            assert_eq!(stored.group, spec.group);
            assert_eq!(stored.criticality, spec.criticality);
            checked += 1;
            Ok::<(), telltale_pipelines::Error>(())
        })
        .unwrap();
    assert_eq!(checked, 3);
}

#[test]
fn too_little_data_on_one_asset_is_reported_and_the_others_are_fitted() {
    let dir = tempfile::tempdir().unwrap();
    let history = dir.path().join("h.parquet");
    let mut w = HistoryWriter::try_new(&history, HistoryWriterOptions::default()).unwrap();
    // "long": 200 one-minute readings; "short": 10 readings, below the default
    // min_rows of 30 grid rows
    let ts: Vec<i64> = (0..200).map(|i| i * 60_000).collect();
    let v: Vec<f64> = (0..200).map(|i| 50.0 + ((i * 37 % 17) as f64 - 8.0) * 0.1).collect();
    w.write_series("long", "temp", &ts, &v).unwrap();
    w.write_series("short", "temp", &ts[..10], &v[..10]).unwrap();
    w.close().unwrap();
    let store_dir = dir.path().join("store");
    let report = run_fit(&FitSettings::new(&history, 200 * 60_000, &store_dir)).unwrap();
    assert_eq!(report.outcome(), FitOutcome::Complete);
    assert_eq!(report.assets_fitted.len(), 1);
    assert_eq!(report.assets_failed.len(), 1);
    let f = &report.assets_failed[0];
    assert_eq!((f.asset.as_str(), f.kind), ("short", FailureKind::InsufficientData));
    assert!(f.reason.contains("grid rows"), "{}", f.reason);
    let store = Store::open(&store_dir).unwrap();
    assert_eq!(store.list().unwrap(), ["long"]);
    assert_eq!(store.manifest().unwrap().assets.len(), 1);
    // without a registry: own group, condition sensor, no range
    let b = store.read_baseline("long").unwrap();
    assert_eq!(b.group, "long");
    assert_eq!(b.sensors[0].range, None);
}
