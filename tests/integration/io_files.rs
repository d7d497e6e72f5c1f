//! Event (DESIGN.md 4.3) and suspicion (4.4) files: round trips in every
//! format and clear errors naming file, row and field.

use std::path::Path;
use telltale_pipelines::io::{
    FileFormat, read_events, read_events_from, read_suspicions, read_suspicions_from, write_events,
    write_events_to, write_suspicions, write_suspicions_to,
};
use telltale_pipelines::record::{Class, Event, Evidence, Mode, Suspicion, suspicion_id};

// the tests crate has no chrono dependency; the library's own parser gives the UTC time
macro_rules! t {
    ($s:expr) => {
        telltale_pipelines::time::parse_time($s).unwrap()
    };
}

// The example rows of DESIGN.md 4.3, verbatim.
const DESIGN_EVENTS: &str = "asset,sensor,class,mode,start,end,note
north-b1,bearing_de,sensor_fault,bias,2026-03-02T10:00:00Z,2026-03-09T00:00:00Z,probe re-seated
north-b1,,failure,,2026-05-11T04:30:00Z,,bearing seized
";

#[expect(clippy::unwrap_used, reason = "test helper")]
fn events() -> Vec<Event> {
    read_events_from(DESIGN_EVENTS.as_bytes(), FileFormat::Csv, Path::new("events.csv")).unwrap()
}

fn suspicions() -> Vec<Suspicion> {
    let onset = t!("2026-03-02T10:00:00Z");
    vec![
        Suspicion {
            id: suspicion_id("north-b1", Some("bearing_de"), Class::SensorFault, Mode::Bias, onset),
            rank: 1,
            asset: "north-b1".into(),
            sensor: Some("bearing_de".into()),
            class: Class::SensorFault,
            mode: Mode::Bias,
            score: 0.91,
            magnitude: 4.25,
            onset,
            detected: t!("2026-03-02T16:00:00.250Z"),
            summary: "bearing_de reads 6 degC above its neighbours, \"check the probe\"".into(),
            evidence: vec![
                Evidence {
                    test: "cusum_up".into(),
                    statistic: 7.5,
                    threshold: 5.0,
                    p_value: None,
                    detail: "baseline fit 2026-01".into(),
                },
                Evidence {
                    test: "peer_robust_z".into(),
                    statistic: 0.4,
                    threshold: 3.0,
                    p_value: Some(0.012),
                    detail: "peers north-b2, north-b3".into(),
                },
            ],
        },
        Suspicion {
            id: "abc".into(),
            rank: 2,
            asset: "south-r1".into(),
            sensor: None,
            class: Class::ProcessChange,
            mode: Mode::CommonMode,
            score: 0.3,
            magnitude: -1.5,
            onset: t!("2026-04-01T00:00:00Z"),
            detected: t!("2026-04-02T00:00:00Z"),
            summary: "site south runs hotter".into(),
            evidence: vec![],
        },
    ]
}

#[test]
fn design_example_events_parse() {
    let e = events();
    assert_eq!(e.len(), 2);
    assert_eq!(e[0].mode, Some(Mode::Bias));
    assert_eq!(e[0].end, Some(t!("2026-03-09T00:00:00Z")));
    assert_eq!(e[1].sensor, None);
    assert_eq!(e[1].mode, None);
    assert_eq!(e[1].end, None);
    assert_eq!(e[1].class, Class::Failure);
}

#[test]
fn events_round_trip_in_every_format() {
    let want = events();
    for f in [FileFormat::Csv, FileFormat::Jsonl] {
        let mut buf = Vec::new();
        write_events_to(&mut buf, f, &want, Path::new("mem")).unwrap();
        let got = read_events_from(buf.as_slice(), f, Path::new("mem")).unwrap();
        assert_eq!(got, want, "{f:?}");
    }
    let mut csv = Vec::new();
    write_events_to(&mut csv, FileFormat::Csv, &want, Path::new("mem")).unwrap();
    assert_eq!(
        String::from_utf8(csv).unwrap(),
        DESIGN_EVENTS,
        "CSV is written in the DESIGN layout"
    );
    let dir = tempfile::tempdir().unwrap();
    for name in ["e.parquet", "e.csv", "e.jsonl"] {
        let p = dir.path().join(name);
        write_events(&p, &want).unwrap();
        assert_eq!(read_events(&p).unwrap(), want, "{name}");
    }
}

#[test]
fn suspicions_round_trip_in_every_format() {
    let want = suspicions();
    for f in [FileFormat::Csv, FileFormat::Jsonl] {
        let mut buf = Vec::new();
        write_suspicions_to(&mut buf, f, &want, Path::new("mem")).unwrap();
        let got = read_suspicions_from(buf.as_slice(), f, Path::new("mem")).unwrap();
        assert_eq!(got, want, "{f:?}");
    }
    let dir = tempfile::tempdir().unwrap();
    for name in ["s.parquet", "s.csv", "s.jsonl"] {
        let p = dir.path().join(name);
        write_suspicions(&p, &want).unwrap();
        assert_eq!(read_suspicions(&p).unwrap(), want, "{name}");
    }
    // Parquet timestamps are Timestamp(ms, UTC); source: arrow-rs reads back the schema we wrote
    let p = dir.path().join("s.parquet");
    let file = std::fs::File::open(&p).unwrap();
    let b = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(file).unwrap();
    assert_eq!(
        b.schema().field_with_name("onset").unwrap().data_type(),
        &arrow_schema::DataType::Timestamp(arrow_schema::TimeUnit::Millisecond, Some("UTC".into()))
    );
}

#[expect(clippy::unwrap_used, reason = "test helper")]
fn event_err(csv: &str) -> String {
    let text = format!("asset,sensor,class,mode,start,end,note\n{csv}\n");
    let e =
        read_events_from(text.as_bytes(), FileFormat::Csv, Path::new("labels.csv")).unwrap_err();
    assert!(e.is_bad_input());
    e.to_string()
}

#[test]
fn bad_events_name_file_row_and_field() {
    let m = event_err("a,,sensor_fault,bias,2026-03-09T00:00:00Z,2026-03-02T00:00:00Z,x");
    assert!(
        m.contains("labels.csv") && m.contains("row 2 (header is row 1)") && m.contains("`end`"),
        "{m}"
    );
    assert!(m.contains("before start"), "{m}");
    let m = event_err("a,,sensor_faults,bias,2026-03-02T00:00:00Z,,x");
    assert!(m.contains("`class`") && m.contains("process_change"), "{m}");
    let m = event_err("a,,sensor_fault,biass,2026-03-02T00:00:00Z,,x");
    assert!(m.contains("`mode`") && m.contains("out_of_range"), "{m}");
    let m = event_err("a,,equipment_fault,bias,2026-03-02T00:00:00Z,,x");
    assert!(m.contains("does not belong") && m.contains("degradation, step_change"), "{m}");
    let m = event_err("a,,failure,stuck,2026-03-02T00:00:00Z,,x");
    assert!(m.contains("takes no mode"), "{m}");
    let m = event_err("a,,failure,,02/03/2026,,x");
    assert!(m.contains("`start`") && m.contains("RFC 3339"), "{m}");
    let e = read_events_from("asset,class,start\n".as_bytes(), FileFormat::Csv, Path::new("x.csv"))
        .unwrap_err();
    assert!(e.to_string().contains("asset,sensor,class,mode,start,end,note"), "{e}");
    let e = read_events_from(
        "{\"asset\":\"a\",\"class\":\"failure\",\"start\":\"2026-03-02T00:00:00Z\"}\n{\"asset\":\"a\",\"class\":\"nope\",\"start\":\"2026-03-02T00:00:00Z\"}\n"
            .as_bytes(),
        FileFormat::Jsonl,
        Path::new("x.jsonl"),
    )
    .unwrap_err();
    assert!(e.to_string().contains("line 2") && e.to_string().contains("`class`"), "{e}");
}

#[test]
fn bad_suspicions_name_row_and_field() {
    let mut buf = Vec::new();
    write_suspicions_to(&mut buf, FileFormat::Csv, &suspicions(), Path::new("mem")).unwrap();
    let text = String::from_utf8(buf).unwrap().replace("common_mode", "degradation");
    let e = read_suspicions_from(text.as_bytes(), FileFormat::Csv, Path::new("s.csv")).unwrap_err();
    assert!(e.to_string().contains("row 3 (header is row 1), field `mode`"), "{e}");
    let e = read_suspicions_from(
        "id,rank,asset,sensor,class,mode,score,magnitude,onset,detected,summary,evidence\nx,1,a,,sensor_fault,bias,0.5,1,2026-03-02T00:00:00Z,2026-03-02T00:00:00Z,s,not json\n"
            .as_bytes(),
        FileFormat::Csv,
        Path::new("s.csv"),
    )
    .unwrap_err();
    assert!(e.to_string().contains("field `evidence`"), "{e}");
    assert!(FileFormat::from_path(Path::new("s.txt")).is_err());
}

#[test]
fn suspicions_with_impossible_numbers_are_refused_before_anything_is_written() {
    // JSON has no NaN: serde_json would write `null`, which no reader accepts back.
    for (field, edit) in [
        ("score", Box::new(|s: &mut Suspicion| s.score = f64::NAN) as Box<dyn Fn(&mut Suspicion)>),
        ("score", Box::new(|s: &mut Suspicion| s.score = 1.5)),
        ("magnitude", Box::new(|s: &mut Suspicion| s.magnitude = f64::INFINITY)),
        ("rank", Box::new(|s: &mut Suspicion| s.rank = 0)),
        ("statistic", Box::new(|s: &mut Suspicion| s.evidence[0].statistic = f64::NAN)),
    ] {
        let mut items = suspicions();
        edit(items.first_mut().unwrap()); // the first item carries evidence
        for f in [FileFormat::Csv, FileFormat::Jsonl] {
            let mut buf = Vec::new();
            let e = write_suspicions_to(&mut buf, f, &items, Path::new("out.jsonl")).unwrap_err();
            assert!(e.to_string().contains(field), "{field}: {e}");
            assert!(buf.is_empty(), "nothing is written when an item is refused");
        }
    }
}

#[test]
fn suspicion_rank_zero_is_refused_on_read() {
    let e = read_suspicions_from(
        "id,rank,asset,sensor,class,mode,score,magnitude,onset,detected,summary,evidence\nx,0,a,,sensor_fault,bias,0.5,1,2026-03-02T00:00:00Z,2026-03-02T00:00:00Z,s,[]\n"
            .as_bytes(),
        FileFormat::Csv,
        Path::new("s.csv"),
    )
    .unwrap_err();
    assert!(e.to_string().contains("field `rank`"), "{e}");
}

#[test]
fn events_csv_with_a_byte_order_mark_parses() {
    // spreadsheet exports often start with a UTF-8 byte order mark
    let text = format!("\u{feff}{DESIGN_EVENTS}");
    let got = read_events_from(text.as_bytes(), FileFormat::Csv, Path::new("e.csv")).unwrap();
    let want = read_events_from(DESIGN_EVENTS.as_bytes(), FileFormat::Csv, Path::new("e.csv"));
    assert_eq!(got, want.unwrap());
}
