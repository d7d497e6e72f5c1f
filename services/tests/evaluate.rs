//! End-to-end tests of `telltale evaluate` on small hand-made files: the
//! tables on stdout, the JSON report, and exit 2 on bad usage or input.
//!
//! Every expected figure is a hand computation from the files written in
//! [`write_case`]; the arithmetic is in the comments there and beside the checks.
#![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]

use assert_cmd::Command;
use predicates::prelude::*;
use std::path::{Path, PathBuf};
use telltale_pipelines::jobs::EvaluationReport;

fn telltale() -> Command {
    Command::cargo_bin("telltale").unwrap()
}

const FLEET: &str = r#"
[group.pump]
sensors = [ { id = "temp", unit = "degC" } ]

[[asset]]
id = "p1"
group = "pump"

[[asset]]
id = "p2"
group = "pump"

[[asset]]
id = "p3"
group = "pump"
"#;

/// Ground truth over the span 2026-03-01 .. 2026-03-15 (14 days):
/// a bias on p1/temp, a degradation of p1 ending in a failure and a repair,
/// an open-ended level shift on p2; p3 has nothing (the clean asset).
const EVENTS: &str = "\
asset,sensor,class,mode,start,end,note
p1,temp,sensor_fault,bias,2026-03-03T00:00:00Z,2026-03-05T00:00:00Z,probe offset
p1,,equipment_fault,degradation,2026-03-07T00:00:00Z,2026-03-10T00:00:00Z,bearing wear
p1,,failure,,2026-03-10T00:00:00Z,,bearing seized
p1,,maintenance,,2026-03-10T00:00:00Z,2026-03-11T00:00:00Z,bearing replaced
p2,,process_change,level_shift,2026-03-08T00:00:00Z,,setpoint raised
";

const OUTAGES: &str = "\
asset,start,end,note
p2,2026-03-02T00:00:00Z,2026-03-02T12:00:00Z,power cut
";

fn suspicion(
    n: u32,
    asset: &str,
    sensor: Option<&str>,
    cm: (&str, &str),
    onset: &str,
    detected: &str,
) -> String {
    let sensor = sensor.map_or_else(|| "null".to_owned(), |s| format!("\"{s}\""));
    format!(
        "{{\"id\":\"s{n}\",\"rank\":{n},\"asset\":\"{asset}\",\"sensor\":{sensor},\"class\":\"{}\",\
         \"mode\":\"{}\",\"score\":0.5,\"magnitude\":3.0,\"onset\":\"{onset}\",\
         \"detected\":\"{detected}\",\"summary\":\"hand-made\",\"evidence\":[]}}\n",
        cm.0, cm.1
    )
}

fn suspicions() -> String {
    [
        // s1 matches the bias: delay 6 h
        suspicion(
            1,
            "p1",
            Some("temp"),
            ("sensor_fault", "bias"),
            "2026-03-03T00:00:00Z",
            "2026-03-03T06:00:00Z",
        ),
        // s2 matches the degradation: delay 24 h; 48 h before the failure
        suspicion(
            2,
            "p1",
            None,
            ("equipment_fault", "degradation"),
            "2026-03-07T00:00:00Z",
            "2026-03-08T00:00:00Z",
        ),
        // s3 matches the level shift with the wrong mode: delay 12 h
        suspicion(
            3,
            "p2",
            None,
            ("process_change", "regime_change"),
            "2026-03-08T00:00:00Z",
            "2026-03-08T12:00:00Z",
        ),
        // s4: false alarm on the clean asset p3
        suspicion(
            4,
            "p3",
            Some("temp"),
            ("sensor_fault", "spikes"),
            "2026-03-12T00:00:00Z",
            "2026-03-12T00:00:00Z",
        ),
        // s5: false alarm after the degradation's grace (03-11T00), inside the
        // repair's grace (to 03-12T00)
        suspicion(
            5,
            "p1",
            None,
            ("equipment_fault", "step_change"),
            "2026-03-11T12:00:00Z",
            "2026-03-11T12:00:00Z",
        ),
        // s6: false alarm inside p2's outage
        suspicion(
            6,
            "p2",
            Some("temp"),
            ("sensor_fault", "dropout"),
            "2026-03-02T00:00:00Z",
            "2026-03-02T06:00:00Z",
        ),
        // s7: false alarm in p1's clean time
        suspicion(
            7,
            "p1",
            Some("temp"),
            ("sensor_fault", "noise"),
            "2026-03-13T00:00:00Z",
            "2026-03-13T00:00:00Z",
        ),
        // s8: detected after the span: ignored
        suspicion(
            8,
            "p1",
            Some("temp"),
            ("sensor_fault", "noise"),
            "2026-03-20T00:00:00Z",
            "2026-03-20T00:00:00Z",
        ),
    ]
    .concat()
}

struct Case {
    suspicions: PathBuf,
    events: PathBuf,
    fleet: PathBuf,
    outages: PathBuf,
}

fn write_case(dir: &Path) -> Case {
    let c = Case {
        suspicions: dir.join("suspicions.jsonl"),
        events: dir.join("events.csv"),
        fleet: dir.join("fleet.toml"),
        outages: dir.join("outages.csv"),
    };
    std::fs::write(&c.suspicions, suspicions()).unwrap();
    std::fs::write(&c.events, EVENTS).unwrap();
    std::fs::write(&c.fleet, FLEET).unwrap();
    std::fs::write(&c.outages, OUTAGES).unwrap();
    c
}

/// The report written by `--json`.
fn read_report(path: &Path) -> EvaluationReport {
    EvaluationReport::from_json(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn evaluate_cmd(c: &Case) -> Command {
    let mut cmd = telltale();
    cmd.arg("evaluate")
        .arg("--suspicions")
        .arg(&c.suspicions)
        .arg("--events")
        .arg(&c.events)
        .arg("--fleet")
        .arg(&c.fleet)
        .args(["--from", "2026-03-01", "--to", "2026-03-15"]);
    cmd
}

#[test]
fn evaluate_prints_tables_and_writes_the_json_report() {
    let dir = tempfile::tempdir().unwrap();
    let c = write_case(dir.path());
    let json = dir.path().join("report.json");
    evaluate_cmd(&c)
        .arg("--outages")
        .arg(&c.outages)
        .arg("--json")
        .arg(&json)
        .assert()
        .success()
        .stdout(predicate::str::contains("suspicions 7 in span (1 outside, ignored)"))
        .stdout(predicate::str::contains("confusion"))
        .stdout(predicate::str::contains("warned 1/1; median lead 48.0 h"))
        // exposure 25.5 d = 3.6 asset-weeks; 2 / (25.5 / 7) * 100 = 54.90
        .stdout(predicate::str::contains("54.90 per 100 asset-weeks"))
        // clean asset p3: 1 false alarm over 2 asset-weeks = 50.00
        .stdout(predicate::str::contains("50.00 per 100 asset-weeks (1 assets)"));

    let r = read_report(&json);
    assert_eq!((r.events.scored, r.overall.detected), (3, 3));
    assert_eq!(r.overall.class_accuracy, Some(1.0));
    // s3 has the right class, the wrong mode: 2 of 3
    assert_eq!(r.overall.mode_accuracy, Some(2.0 / 3.0));
    // delays 6, 12, 24 h: median 12; type 7 p90 = 12 + 0.8 * 12 = 21.6
    // (Hyndman & Fan 1996 type 7; numpy.percentile([6, 12, 24], 90) = 21.6)
    assert_eq!(r.overall.delay_median_hours, Some(12.0));
    assert!((r.overall.delay_p90_hours.unwrap() - 21.6).abs() < 1e-12);
    assert_eq!(r.by_class[0].score.delay_median_hours, Some(6.0));
    // lead time: degradation 03-07 .. 03-10 opens the window; s2 at 03-08 → 48 h
    let f = &r.lead_time.failures[0];
    assert_eq!((f.lead_hours, f.warned_by.as_deref()), (Some(48.0), Some("s2")));
    let shares: Vec<_> = r.lead_time.marks.iter().map(|m| m.share).collect();
    assert_eq!(shares, vec![Some(1.0), Some(0.0), Some(0.0)]);
    // exposure by hand, 14 days per asset:
    //   p1 loses [03-03, 03-06) bias + grace = 3 d, and the union of
    //      degradation + grace [03-07, 03-11), failure + grace [03-10, 03-11),
    //      repair + grace [03-10, 03-12) = [03-07, 03-12) = 5 d → 6 d clean
    //   p2 loses the outage + grace [03-02T00, 03-03T12) = 1.5 d and the
    //      open level shift [03-08, 03-15) = 7 d → 5.5 d clean
    //   p3 is clean: 14 d
    //   25.5 d = 3.642857 weeks
    let fa = &r.false_alarms;
    assert!((fa.exposure_asset_weeks - 25.5 / 7.0).abs() < 1e-12);
    assert_eq!((fa.total, fa.in_clean_time, fa.in_maintenance, fa.in_outages), (4, 2, 1, 1));
    assert!((fa.per_100_asset_weeks.unwrap() - 200.0 / (25.5 / 7.0)).abs() < 1e-9);
    assert_eq!(fa.clean_assets.assets, vec!["p3"]);
    assert_eq!(fa.clean_assets.per_100_asset_weeks, Some(50.0));
}

#[test]
fn without_outages_their_time_counts_as_clean() {
    let dir = tempfile::tempdir().unwrap();
    let c = write_case(dir.path());
    let json = dir.path().join("report.json");
    evaluate_cmd(&c).arg("--json").arg(&json).assert().success();
    let r = read_report(&json);
    // p2 gains the 1.5 outage days: 27 d; s6 is now in clean time: 3 / (27 / 7) * 100
    assert!((r.false_alarms.exposure_asset_weeks - 27.0 / 7.0).abs() < 1e-12);
    assert_eq!(r.false_alarms.in_clean_time, 3);
    assert_eq!(r.false_alarms.in_outages, 0);
}

#[test]
fn grace_is_a_flag() {
    let dir = tempfile::tempdir().unwrap();
    let c = write_case(dir.path());
    let json = dir.path().join("report.json");
    // with no grace s5 (03-11T12) is outside the repair window [03-10, 03-11]
    evaluate_cmd(&c).args(["--grace-hours", "0", "--json"]).arg(&json).assert().success();
    let r = read_report(&json);
    assert_eq!(r.settings.grace_hours, 0.0);
    assert_eq!(r.false_alarms.in_maintenance, 0);
    evaluate_cmd(&c)
        .arg("--grace-hours=-1")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--grace-hours"));
}

#[test]
fn bad_usage_and_bad_input_exit_2_naming_what_to_fix() {
    let dir = tempfile::tempdir().unwrap();
    let c = write_case(dir.path());
    // a bad time names the flag and the value
    let mut cmd = telltale();
    cmd.arg("evaluate").arg("--suspicions").arg(&c.suspicions).arg("--events").arg(&c.events);
    cmd.arg("--fleet").arg(&c.fleet).args(["--from", "01/03/2026", "--to", "2026-03-15"]);
    cmd.assert()
        .code(2)
        .stdout(predicate::str::is_empty())
        .stderr(predicate::str::contains("--from"))
        .stderr(predicate::str::contains("01/03/2026"));
    // an empty span
    let mut cmd = telltale();
    cmd.arg("evaluate").arg("--suspicions").arg(&c.suspicions).arg("--events").arg(&c.events);
    cmd.arg("--fleet").arg(&c.fleet).args(["--from", "2026-03-15", "--to", "2026-03-15"]);
    cmd.assert().code(2).stderr(predicate::str::contains("would be empty"));
    // a missing file names its flag
    evaluate_cmd(&c)
        .arg("--outages")
        .arg(dir.path().join("nope.csv"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--outages"))
        .stderr(predicate::str::contains("nope.csv"));
    // a bad event row names the file, the row and the field
    std::fs::write(&c.events, EVENTS.replace("level_shift", "level_shfit")).unwrap();
    evaluate_cmd(&c)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("events.csv"))
        .stderr(predicate::str::contains("row 6"))
        .stderr(predicate::str::contains("level_shfit"));
    std::fs::write(&c.events, EVENTS).unwrap();
    // a bad outage row too
    std::fs::write(&c.outages, "asset,start,end,note\np2,2026-03-02,2026-03-01,x\n").unwrap();
    evaluate_cmd(&c)
        .arg("--outages")
        .arg(&c.outages)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("outages.csv"))
        .stderr(predicate::str::contains("row 2"))
        .stderr(predicate::str::contains("`end`"));
    // required flags
    telltale().args(["evaluate", "--events", "e.csv"]).assert().code(2);
}
