//! End-to-end tests of `telltale import-events` on small hand-made
//! work-order exports: the events file, the rejects file, the summary on
//! stdout, and exit 2 on bad usage, bad input or when no row is usable.
//!
//! Every expected value is read off the files written here by hand; the
//! expected events file is additionally read back with the project's own
//! event reader, so the output is a valid DESIGN.md 4.3 events file.
#![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]

use assert_cmd::Command;
use predicates::prelude::*;
use std::path::{Path, PathBuf};
use telltale_pipelines::io::read_events;
use telltale_pipelines::record::Class;

fn telltale() -> Command {
    Command::cargo_bin("telltale").unwrap()
}

/// A semicolon-delimited export with a BOM, its own column names, a
/// day-first date layout, a quoted multi-line field and five bad rows.
///
/// | row | what                                   | expected              |
/// |-----|----------------------------------------|-----------------------|
/// | 2   | north-b2 seized, bearing replaced      | failure (precedence)  |
/// | 3   | north-b1 greased, with an end          | maintenance, end set  |
/// | 4   | north-b1 tripped (two-line text)       | failure               |
/// | 5   | no asset                               | missing_asset         |
/// | 6   | date "sometime in May"                 | bad_date              |
/// | 7   | "operator training" (no keyword)       | no_keyword            |
/// | 8   | west-b9, not in the fleet              | unknown_asset         |
/// | 9   | end before start                       | end_before_start      |
/// | 10  | north-b1 impeller cleaned, ISO date    | maintenance           |
const WORKORDERS: &str = "\u{feff}Equipment;Reported;Done;Work done\n\
north-b2;11/05/2026 04:30;;Pump seized, bearing replaced\n\
north-b1;02/03/2026 10:00;02/03/2026 14:00;Greased bearings\n\
north-b1;01/04/2026 08:15;;\"Motor tripped on overload;\nreset and restarted\"\n\
;03/03/2026 09:00;;Seal leaking\n\
north-b2;sometime in May;;Coupling realigned\n\
north-b1;04/03/2026 09:00;;Operator training\n\
west-b9;05/03/2026 09:00;;Pump failed\n\
north-b2;06/03/2026 12:00;05/03/2026 12:00;Impeller inspected\n\
north-b1;2026-03-01;;Impeller cleaned\n";

const FLEET: &str = r#"
[group.booster]
sensors = [ { id = "bearing_de", unit = "degC" } ]

[[asset]]
id = "north-b1"
group = "booster"

[[asset]]
id = "north-b2"
group = "booster"
"#;

struct Case {
    dir: tempfile::TempDir,
    workorders: PathBuf,
    fleet: PathBuf,
}

impl Case {
    fn new(workorders: &str) -> Case {
        let dir = tempfile::tempdir().unwrap();
        let wo = dir.path().join("workorders.csv");
        std::fs::write(&wo, workorders).unwrap();
        let fleet = dir.path().join("fleet.toml");
        std::fs::write(&fleet, FLEET).unwrap();
        Case { workorders: wo, fleet, dir }
    }

    fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// The full invocation for [`WORKORDERS`].
    fn command(&self, out: &Path) -> Command {
        let mut c = telltale();
        c.arg("import-events")
            .arg("--workorders")
            .arg(&self.workorders)
            .arg("--out")
            .arg(out)
            .args(["--asset-column", "Equipment", "--date-column", "Reported"])
            .args(["--end-column", "Done", "--text-column", "Work done"])
            .args(["--date-format", "%d/%m/%Y %H:%M", "--delimiter", ";"])
            .arg("--fleet")
            .arg(&self.fleet);
        c
    }
}

#[test]
fn import_writes_sorted_events_and_a_summary() {
    let case = Case::new(WORKORDERS);
    let out = case.path("events.csv");
    case.command(&out)
        .assert()
        .success()
        .stdout(predicate::str::contains("9 rows read"))
        .stdout(predicate::str::contains("events 4: failure 2, maintenance 2"))
        .stdout(predicate::str::contains("unused rows 5"))
        .stdout(predicate::str::contains("missing_asset           1"))
        .stdout(predicate::str::contains("row 6: field \"Reported\": cannot read the date"))
        .stdout(predicate::str::contains("row 8: field \"Equipment\": asset \"west-b9\""));

    // sorted by asset then start: north-b1 03-01, 03-02, 04-01; north-b2 05-11
    let text = std::fs::read_to_string(&out).unwrap();
    let expected = "\
asset,sensor,class,mode,start,end,note
north-b1,,maintenance,,2026-03-01T00:00:00Z,,Impeller cleaned
north-b1,,maintenance,,2026-03-02T10:00:00Z,2026-03-02T14:00:00Z,Greased bearings
north-b1,,failure,,2026-04-01T08:15:00Z,,\"Motor tripped on overload;
reset and restarted\"
north-b2,,failure,,2026-05-11T04:30:00Z,,\"Pump seized, bearing replaced\"
";
    assert_eq!(text, expected);
    let events = read_events(&out).unwrap();
    assert_eq!(events.len(), 4);
    assert_eq!(events[3].class, Class::Failure);
    assert_eq!(events[2].note, "Motor tripped on overload;\nreset and restarted");
}

#[test]
fn rejects_file_lists_each_unused_row_with_its_fields() {
    let case = Case::new(WORKORDERS);
    let out = case.path("events.csv");
    let rejects = case.path("rejects.csv");
    case.command(&out).arg("--rejects").arg(&rejects).assert().success();
    let mut rdr = csv::Reader::from_path(&rejects).unwrap();
    let header: Vec<String> = rdr.headers().unwrap().iter().map(str::to_owned).collect();
    assert_eq!(header, ["row", "reason", "detail", "Equipment", "Reported", "Done", "Work done"]);
    let rows: Vec<Vec<String>> =
        rdr.records().map(|r| r.unwrap().iter().map(str::to_owned).collect()).collect();
    let short: Vec<(&str, &str)> = rows.iter().map(|r| (r[0].as_str(), r[1].as_str())).collect();
    assert_eq!(
        short,
        [
            ("5", "missing_asset"),
            ("6", "bad_date"),
            ("7", "no_keyword"),
            ("8", "unknown_asset"),
            ("9", "end_before_start"),
        ]
    );
    assert_eq!(rows[1][3..], ["north-b2", "sometime in May", "", "Coupling realigned"]);
    assert!(rows[1][2].contains("\"sometime in May\""), "{}", rows[1][2]);
    assert!(rows[1][2].contains("%d/%m/%Y %H:%M"), "{}", rows[1][2]);
    assert_eq!(
        rows[4][3..],
        ["north-b2", "06/03/2026 12:00", "05/03/2026 12:00", "Impeller inspected"]
    );
}

#[test]
fn without_the_fleet_every_asset_is_accepted_and_keywords_can_be_replaced() {
    let case = Case::new(
        "asset,date,description\n\
         p1,2026-03-02 10:00,Pump seized\n\
         p1,2026-03-03,Gland packing adjusted\n\
         p2,2026-03-04T06:00:00+02:00,pump tripped\n",
    );
    let out = case.path("events.jsonl");
    telltale()
        .arg("import-events")
        .arg("--workorders")
        .arg(&case.workorders)
        .arg("--out")
        .arg(&out)
        .args(["--failure-words", "tripped, seized", "--maintenance-words", "gland packing"])
        .assert()
        .success()
        .stdout(predicate::str::contains("events 3: failure 2, maintenance 1"))
        .stdout(predicate::str::contains("unused rows 0"));
    let events = read_events(&out).unwrap();
    let got: Vec<(&str, Class, i64)> =
        events.iter().map(|e| (e.asset.as_str(), e.class, e.start.timestamp())).collect();
    // epoch seconds from Python 3: datetime.fromisoformat("2026-03-02T10:00:00+00:00").timestamp()
    // = 1772445600, "2026-03-03T00:00:00+00:00" = 1772496000, "2026-03-04T06:00:00+02:00" = 1772596800
    assert_eq!(
        got,
        [
            ("p1", Class::Failure, 1_772_445_600),
            ("p1", Class::Maintenance, 1_772_496_000),
            ("p2", Class::Failure, 1_772_596_800),
        ]
    );
}

#[test]
fn no_usable_row_exits_2_and_writes_no_events() {
    let case = Case::new("asset,date,description\np1,2026-03-02,operator training\n,,\n");
    let out = case.path("events.csv");
    let rejects = case.path("rejects.csv");
    telltale()
        .arg("import-events")
        .arg("--workorders")
        .arg(&case.workorders)
        .arg("--out")
        .arg(&out)
        .arg("--rejects")
        .arg(&rejects)
        .assert()
        .code(2)
        .stdout(predicate::str::contains("1 rows read, 1 blank rows skipped"))
        .stdout(predicate::str::contains("no_keyword"))
        .stderr(predicate::str::contains("none of the 1 rows gave an event"));
    assert!(!out.exists());
    let rejects = std::fs::read_to_string(&rejects).unwrap();
    assert!(
        rejects.starts_with("row,reason,detail,asset,date,description\n2,no_keyword,"),
        "{rejects}"
    );
}

#[test]
fn missing_column_exits_2_naming_it_and_the_header() {
    let case = Case::new("Equipment,date,description\np1,2026-03-02,seized\n");
    let out = case.path("events.csv");
    telltale()
        .arg("import-events")
        .arg("--workorders")
        .arg(&case.workorders)
        .arg("--out")
        .arg(&out)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("no column \"asset\""))
        .stderr(predicate::str::contains("\"Equipment\", \"date\", \"description\""));
    assert!(!out.exists());
}

#[test]
fn bad_flags_exit_2_before_reading() {
    let case = Case::new(WORKORDERS);
    let run = |extra: &[&str], out: &str, wanted: &str| {
        telltale()
            .arg("import-events")
            .arg("--workorders")
            .arg(&case.workorders)
            .arg("--out")
            .arg(case.path(out))
            .args(extra)
            .assert()
            .code(2)
            .stderr(predicate::str::contains(wanted.to_owned()));
    };
    run(&["--delimiter", ";;"], "e.csv", "--delimiter \";;\"");
    run(&["--failure-words", " , "], "e.csv", "--failure-words");
    run(&["--date-format", "%d/%Q"], "e.csv", "--date-format \"%d/%Q\" is not a valid");
    run(&["--failure-words", "seized", "--maintenance-words", "Seized"], "e.csv", "in both");
    run(&[], "events.txt", "--out");
    run(&["--rejects", "r.txt"], "e.csv", "--rejects");
    run(&["--fleet", "nope.toml"], "e.csv", "--fleet nope.toml: no such file");
    telltale()
        .args(["import-events", "--workorders", "missing.csv", "--out", "e.csv"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--workorders missing.csv: no such file"));
    telltale()
        .arg("import-events")
        .arg("--workorders")
        .arg(&case.workorders)
        .arg("--out")
        .arg(&case.workorders)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("is the work-order export itself"));
    assert!(!case.path("e.csv").exists());
}
