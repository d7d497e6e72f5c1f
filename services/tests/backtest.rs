//! End-to-end tests of `telltale backtest` through the binary: the output
//! directory, the summary on stdout, a failure-only archive, and exit 2 on
//! bad usage. The replay's rules are tested where they live
//! (`pipelines/src/jobs/backtest.rs` for the bookkeeping and scoring cases,
//! `tests/integration/backtest.rs` for no look-ahead); here only what the
//! verb adds.
#![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]

use assert_cmd::Command;
use predicates::prelude::*;
use std::path::{Path, PathBuf};
use telltale_pipelines::jobs::BacktestReport;
use telltale_pipelines::jobs::backtest::OUTPUT_FILES;

fn telltale() -> Command {
    Command::cargo_bin("telltale").unwrap()
}

/// A small demo fleet: 2 stations of 3 pumps, 12 days at 5-minute samples.
fn fleet(dir: &Path) -> PathBuf {
    let out = dir.join("fleet");
    telltale()
        .args(["-q", "demo", "--preset", "small", "--sites", "2", "--pumps-per-site", "3"])
        .args(["--days", "12", "--fit-days", "5", "--generate-only", "--out"])
        .arg(&out)
        .assert()
        .success();
    out
}

fn backtest(f: &Path, events: &Path, out: &Path) -> assert_cmd::assert::Assert {
    telltale()
        .args(["-q", "backtest", "--history"])
        .arg(f.join("history.parquet"))
        .arg("--fleet")
        .arg(f.join("fleet.toml"))
        .arg("--events")
        .arg(events)
        .arg("--outages")
        .arg(f.join("outages.csv"))
        .arg("--out")
        .arg(out)
        .args(["--fit-days", "5", "--refit-days", "2", "--min-fit-days", "2"])
        .assert()
}

fn report(out: &Path) -> BacktestReport {
    serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap()
}

#[test]
fn a_backtest_writes_every_table_and_a_summary() {
    let tmp = tempfile::tempdir().unwrap();
    let f = fleet(tmp.path());
    let out = tmp.path().join("bt");
    backtest(&f, &f.join("events.csv"), &out)
        .success()
        .stdout(predicate::str::contains("<- default"))
        .stdout(predicate::str::contains("lead time before failures"))
        .stdout(predicate::str::contains("not a protective or safety function"));
    for name in OUTPUT_FILES {
        assert!(out.join(name).is_file(), "{name} missing");
    }
    let r = report(&out);
    // 6 pumps; replay from the first reading + 5 days to the end: 7 days,
    // cut into folds of 2 days (the last one shorter)
    assert_eq!(r.assets, 6);
    assert_eq!(r.folds.len(), 4);
    assert!(r.judged_asset_weeks > 0.0 && r.judged_asset_weeks <= 6.0 * 7.0 / 7.0 + 1e-9);
    assert_eq!(r.archive, "labelled");
    assert_eq!(r.sweep.iter().filter(|p| p.default).count(), 1);
    // the sweep's points tighten the default: never more suspicions than it
    let at_default = r.sweep.iter().find(|p| p.default).unwrap().suspicions;
    assert_eq!(at_default, r.suspicions);
    assert!(r.sweep.iter().all(|p| p.suspicions <= at_default));
    // one row per asset in the CSV table, and as many suspicions as reported
    let per_asset = std::fs::read_to_string(out.join("per_asset.csv")).unwrap();
    assert_eq!(per_asset.lines().count(), 1 + 6);
    let sus = std::fs::read_to_string(out.join("suspicions.jsonl")).unwrap();
    assert_eq!(sus.lines().filter(|l| !l.trim().is_empty()).count(), r.suspicions);
    // the baselines each fold judged against are kept
    assert!(out.join("baselines").join("fold-000").is_dir());
}

#[test]
fn a_failure_only_archive_is_scored_by_lead_time_and_quiet_time() {
    let tmp = tempfile::tempdir().unwrap();
    let f = fleet(tmp.path());
    // keep only the failure and maintenance rows (the common archive)
    let all = std::fs::read_to_string(f.join("events.csv")).unwrap();
    let mut lines = all.lines();
    let mut kept = vec![lines.next().unwrap().to_owned()];
    kept.extend(
        lines.filter(|l| l.contains(",failure,") || l.contains(",maintenance,")).map(str::to_owned),
    );
    let events = tmp.path().join("archive.csv");
    std::fs::write(&events, kept.join("\n") + "\n").unwrap();
    let out = tmp.path().join("bt");
    backtest(&f, &events, &out).success();
    let r = report(&out);
    assert_eq!(r.archive, "failure_only");
    // no labelled change: no recall at any level, quiet time always measured
    assert!(r.sweep.iter().all(|p| p.recall.is_none()));
    assert!(r.quiet.exposure_asset_weeks > 0.0);
    assert_eq!(r.quiet.per_100_asset_weeks.is_some(), r.quiet.exposure_asset_weeks > 0.0);
}

#[test]
fn bad_usage_exits_2_naming_the_flag() {
    let tmp = tempfile::tempdir().unwrap();
    let events = tmp.path().join("events.csv");
    std::fs::write(&events, "asset,sensor,class,mode,start,end,note\n").unwrap();
    let hist = tmp.path().join("history.parquet");
    std::fs::write(&hist, b"not parquet").unwrap();
    let run = |extra: &[&str]| {
        telltale()
            .args(["-q", "backtest", "--history"])
            .arg(&hist)
            .arg("--events")
            .arg(&events)
            .arg("--out")
            .arg(tmp.path().join("bt"))
            .args(extra)
            .assert()
    };
    run(&["--from", "2026-06-10", "--to", "2026-06-01"])
        .code(2)
        .stderr(predicate::str::contains("--from 2026-06-10 is not before --to 2026-06-01"));
    run(&["--threads", "0"]).code(2).stderr(predicate::str::contains("--threads"));
    run(&["--from", "yesterday"]).code(2).stderr(predicate::str::contains("--from"));
    telltale()
        .args(["-q", "backtest", "--history"])
        .arg(&hist)
        .arg("--events")
        .arg(tmp.path().join("missing.csv"))
        .arg("--out")
        .arg(tmp.path().join("bt"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("missing.csv"));
}
