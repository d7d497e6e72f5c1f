//! End-to-end tests of the `telltale` binary: exit codes, the stdout/stderr
//! split, and the files the demo writes.
#![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]

use assert_cmd::Command;
use predicates::prelude::*;

fn telltale() -> Command {
    Command::cargo_bin("telltale").unwrap()
}

#[test]
fn demo_small_writes_history_registry_and_truth() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    telltale()
        .args(["demo", "--preset", "small", "--out"])
        .arg(&out)
        .assert()
        .success()
        // data on stdout ...
        .stdout(predicate::str::contains("history.parquet"))
        .stdout(predicate::str::contains("sensor_fault"))
        .stdout(predicate::str::contains("review.html"))
        // ... logs on stderr
        .stderr(predicate::str::contains("demo fleet written"));
    for f in ["history.parquet", "fleet.toml", "events.csv", "outages.csv", "review.html"] {
        let p = out.join(f);
        assert!(p.metadata().unwrap().len() > 0, "{f} missing or empty");
    }
    assert!(out.join("suspicions.jsonl").is_file());
    // the weekly review of the scan span's last week, with the caution
    let page = std::fs::read_to_string(out.join("review.html")).unwrap();
    assert!(page.contains("Weekly reliability review"));
    assert!(page.contains("not a protective or safety function"));
    let events = telltale_pipelines::io::read_events(out.join("events.csv")).unwrap();
    assert!(!events.is_empty());
    let registry = telltale_pipelines::registry::Registry::load(out.join("fleet.toml")).unwrap();
    for e in &events {
        assert!(
            registry.asset(&e.asset).is_some(),
            "event asset {} is not in the registry",
            e.asset
        );
    }
}

#[test]
fn demo_is_deterministic_by_seed() {
    let dir = tempfile::tempdir().unwrap();
    let run = |name: &str, seed: &str| {
        let out = dir.path().join(name);
        telltale()
            .args(["-q", "demo", "--preset", "small", "--seed", seed, "--out"])
            .arg(&out)
            .assert()
            .success();
        std::fs::read(out.join("events.csv")).unwrap()
    };
    assert_eq!(run("a", "11"), run("b", "11"));
    assert_ne!(run("a", "11"), run("c", "12"));
}

#[test]
fn bad_setting_is_a_usage_error_naming_the_flag() {
    let dir = tempfile::tempdir().unwrap();
    telltale()
        .args(["demo", "--preset", "small", "--sample-interval-s", "0", "--out"])
        .arg(dir.path())
        .assert()
        .code(2)
        .stdout(predicate::str::is_empty())
        .stderr(predicate::str::contains("telltale demo"));
}

#[test]
fn unknown_flag_and_verb_exit_2() {
    telltale().args(["demo", "--no-such-flag"]).assert().code(2);
    telltale().args(["no-such-verb"]).assert().code(2);
}

#[test]
fn help_documents_exit_codes_and_caution() {
    telltale()
        .arg("--help")
        .assert()
        .success()
        .stdout(predicate::str::contains("Exit codes"))
        .stdout(predicate::str::contains("decision support"));
}

#[test]
fn unwritable_output_is_a_runtime_failure() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("a-file");
    std::fs::write(&file, b"x").unwrap();
    // --out names an existing regular file: the directory cannot be created.
    telltale()
        .args(["demo", "--preset", "small", "--out"])
        .arg(&file)
        .assert()
        .code(1)
        .stderr(predicate::str::contains("a-file"));
}
