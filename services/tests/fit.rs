//! End-to-end tests of `telltale fit`: the store it writes, the stdout/stderr
//! split, and exit codes for bad usage and bad input.
#![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]

use assert_cmd::Command;
use predicates::prelude::*;
use std::path::Path;
use telltale_pipelines::jobs::{Manifest, Store};

fn telltale() -> Command {
    Command::cargo_bin("telltale").unwrap()
}

/// `telltale demo --preset small` into `dir/demo`; its fit span ends 2026-05-06.
fn small_demo(dir: &Path) -> std::path::PathBuf {
    let out = dir.join("demo");
    telltale().args(["-q", "demo", "--preset", "small", "--out"]).arg(&out).assert().success();
    out
}

#[test]
fn fit_writes_one_baseline_per_asset_and_a_manifest() {
    let dir = tempfile::tempdir().unwrap();
    let demo = small_demo(dir.path());
    let store = dir.path().join("store");
    telltale()
        .arg("fit")
        .arg("--history")
        .arg(demo.join("history.parquet"))
        .arg("--fleet")
        .arg(demo.join("fleet.toml"))
        .args(["--until", "2026-05-06", "--store"])
        .arg(&store)
        .assert()
        .success()
        // the table on stdout ...
        .stdout(predicate::str::contains("regimes"))
        .stdout(predicate::str::contains("24 baselines written"))
        // ... logs on stderr
        .stderr(predicate::str::contains("baselines written"))
        .stderr(predicate::str::contains("regimes").not());

    let registry = telltale_pipelines::registry::Registry::load(demo.join("fleet.toml")).unwrap();
    let files: Vec<_> = std::fs::read_dir(store.join("baselines")).unwrap().collect();
    assert_eq!(files.len(), registry.assets.len(), "one file per asset, nothing else");
    let s = Store::open(&store).unwrap();
    assert!(store.join("store.json").is_file());
    let manifest: Manifest = s.manifest().unwrap();
    let listed: Vec<&str> = manifest.assets.iter().map(|e| e.asset.as_str()).collect();
    let mut want: Vec<&str> = registry.assets.iter().map(|a| a.id.as_str()).collect();
    want.sort();
    assert_eq!(listed, want);
    assert_eq!(manifest.assets[0].fit_until, "2026-05-06T00:00:00Z");
    assert_eq!(manifest.assets[0].fit_from, None);
    assert!(manifest.assets[0].history.ends_with("history.parquet"));
    assert_eq!(s.list().unwrap(), want);
    // every baseline deserialises and matches its registry entry
    for a in &registry.assets {
        let b = s.read_baseline(&a.id).unwrap();
        assert_eq!(b.group, a.group);
        assert_eq!(b.sensors.len(), 10);
        assert!(b.baseline.fit_end_ms <= 1_778_025_600_000, "fit ends by 2026-05-06");
        assert!(b.baseline.n_rows_with_data >= 30);
    }
}

#[test]
fn missing_history_is_bad_input_naming_the_path() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("no-such-history.parquet");
    telltale()
        .arg("fit")
        .arg("--history")
        .arg(&missing)
        .args(["--until", "2026-05-06", "--store"])
        .arg(dir.path().join("store"))
        .assert()
        .code(2)
        .stdout(predicate::str::is_empty())
        .stderr(predicate::str::contains("no-such-history.parquet"))
        .stderr(predicate::str::contains("--history"));
}

#[test]
fn bad_until_is_a_usage_error_naming_the_flag() {
    let dir = tempfile::tempdir().unwrap();
    telltale()
        .args(["fit", "--history", "h.parquet", "--until", "06/05/2026", "--store"])
        .arg(dir.path())
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--until"))
        .stderr(predicate::str::contains("06/05/2026"));
    // an empty span, too
    telltale()
        .args(["fit", "--history", "h.parquet", "--from", "2026-05-06", "--until", "2026-05-06"])
        .arg("--store")
        .arg(dir.path())
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--from"));
    // --until and --store are required
    telltale().args(["fit", "--history", "h.parquet"]).assert().code(2);
}

#[test]
fn unreadable_fleet_file_is_bad_input_with_the_line() {
    let dir = tempfile::tempdir().unwrap();
    let demo = small_demo(dir.path());
    let fleet = dir.path().join("fleet.toml");
    std::fs::write(
        &fleet,
        "[group.booster]\nsensors = [\n  { id = \"speed\", rnage = [0, 1] },\n]\n",
    )
    .unwrap();
    telltale()
        .arg("fit")
        .arg("--history")
        .arg(demo.join("history.parquet"))
        .arg("--fleet")
        .arg(&fleet)
        .args(["--until", "2026-05-06", "--store"])
        .arg(dir.path().join("store"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("fleet.toml"))
        .stderr(predicate::str::contains("line 3"))
        .stderr(predicate::str::contains("rnage"));
    // a fleet path that is not there names the flag
    telltale()
        .arg("fit")
        .arg("--history")
        .arg(demo.join("history.parquet"))
        .arg("--fleet")
        .arg(dir.path().join("missing.toml"))
        .args(["--until", "2026-05-06", "--store"])
        .arg(dir.path().join("store"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--fleet"));
}

#[test]
fn a_span_too_short_for_any_asset_exits_2_and_says_why() {
    let dir = tempfile::tempdir().unwrap();
    let demo = small_demo(dir.path());
    // one hour at 5-minute samples: 12 grid rows, fewer than the 30 a baseline needs
    telltale()
        .arg("fit")
        .arg("--history")
        .arg(demo.join("history.parquet"))
        .args(["--from", "2026-05-05T23:00:00Z", "--until", "2026-05-06", "--store"])
        .arg(dir.path().join("store"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("no asset could be fitted"))
        .stderr(predicate::str::contains("grid rows"));
}
