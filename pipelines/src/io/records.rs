//! Event files (DESIGN.md 4.3) and suspicion files (4.4) in JSON Lines, CSV
//! and Parquet.
//!
//! | format  | events                                            | suspicions                                              |
//! |---------|---------------------------------------------------|---------------------------------------------------------|
//! | CSV     | header `asset,sensor,class,mode,start,end,note`   | header of the 4.4 fields; `evidence` a JSON array string |
//! | JSONL   | one object per line, the same field names         | one object per line, `evidence` an array                |
//! | Parquet | the same columns, Utf8; `start`/`end` Timestamp(ms, UTC) (Utf8 RFC 3339 also read) | Utf8 / UInt32 / Float64, `onset`/`detected` Timestamp(ms, UTC), `evidence` a JSON string column |
//!
//! Times are RFC 3339 in text formats. Empty `sensor`, `mode` or `end` mean
//! none. Row numbers in errors are 1-based; in CSV the header is row 1, in
//! JSON Lines they are line numbers, in Parquet they count data rows.

use crate::error::{Error, Result};
use crate::record::{Class, Event, Evidence, Mode, Suspicion};
use crate::time::format_time;
use arrow_array::cast::AsArray;
use arrow_array::types::{
    Float64Type, TimestampMicrosecondType, TimestampMillisecondType, TimestampNanosecondType,
    TimestampSecondType, UInt32Type,
};
use arrow_array::{
    Array, ArrayRef, Float64Array, RecordBatch, StringArray, TimestampMillisecondArray, UInt32Array,
};
use arrow_schema::{DataType, Field, Schema, TimeUnit};
use chrono::{DateTime, Utc};
use parquet::arrow::ArrowWriter;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use std::fs::File;
use std::io::{BufRead, BufReader, BufWriter, Read, Write};
use std::path::Path;
use std::sync::Arc;

/// File format of an event or suspicion file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum FileFormat {
    /// JSON Lines: one JSON object per line.
    Jsonl,
    /// CSV with a header row.
    Csv,
    /// Apache Parquet.
    Parquet,
}

impl FileFormat {
    /// The format from a file extension: `.jsonl`/`.ndjson`, `.csv`, `.parquet`.
    ///
    /// # Errors
    /// [`Error::BadInput`] naming the accepted extensions.
    pub fn from_path(path: &Path) -> Result<Self> {
        let ext = path.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase();
        match ext.as_str() {
            "jsonl" | "ndjson" => Ok(FileFormat::Jsonl),
            "csv" => Ok(FileFormat::Csv),
            "parquet" => Ok(FileFormat::Parquet),
            _ => Err(Error::bad_input(
                path,
                "cannot tell the format from the extension; use .jsonl, .csv or .parquet (or \
                 give the format explicitly)",
            )),
        }
    }
}

impl std::str::FromStr for FileFormat {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s {
            "jsonl" => Ok(FileFormat::Jsonl),
            "csv" => Ok(FileFormat::Csv),
            "parquet" => Ok(FileFormat::Parquet),
            _ => Err(format!("unknown format {s:?}; use jsonl, csv or parquet")),
        }
    }
}

const EVENT_COLUMNS: [&str; 7] = ["asset", "sensor", "class", "mode", "start", "end", "note"];
const SUSPICION_COLUMNS: [&str; 12] = [
    "id",
    "rank",
    "asset",
    "sensor",
    "class",
    "mode",
    "score",
    "magnitude",
    "onset",
    "detected",
    "summary",
    "evidence",
];

/// Where a field came from, for error messages.
struct At<'a> {
    path: &'a Path,
    row: String,
}

impl At<'_> {
    fn err(&self, field: &str, what: impl std::fmt::Display) -> Error {
        Error::bad_input(self.path, format!("{}, field `{field}`: {what}", self.row))
    }
}

fn none_if_empty(s: Option<String>) -> Option<String> {
    s.filter(|x| !x.trim().is_empty())
}

fn parse_rfc3339(at: &At<'_>, field: &str, s: &str) -> Result<DateTime<Utc>> {
    DateTime::parse_from_rfc3339(s.trim()).map(|t| t.to_utc()).map_err(|_| {
        at.err(field, format!("cannot read time {s:?}; use RFC 3339, e.g. 2026-03-02T10:00:00Z"))
    })
}

fn parse_class_mode(
    at: &At<'_>,
    class: &str,
    mode: Option<&str>,
    verdict: bool,
) -> Result<(Class, Option<Mode>)> {
    let class: Class = class.trim().parse().map_err(|e: String| at.err("class", e))?;
    if verdict && !class.is_verdict() {
        return Err(at.err(
            "class",
            format!("{class} is an event class, not a verdict; use sensor_fault, process_change or equipment_fault"),
        ));
    }
    let mode = match mode {
        None => None,
        Some(m) => {
            let m: Mode = m.trim().parse().map_err(|e: String| at.err("mode", e))?;
            if !class.modes().contains(&m) {
                let allowed: Vec<&str> = class.modes().iter().map(|m| m.as_str()).collect();
                return Err(at.err(
                    "mode",
                    if allowed.is_empty() {
                        format!("class {class} takes no mode, got {m}; leave mode empty")
                    } else {
                        format!(
                            "mode {m} does not belong to class {class}; use one of {}",
                            allowed.join(", ")
                        )
                    },
                ));
            }
            Some(m)
        }
    };
    Ok((class, mode))
}

/// Text fields of one event, before validation.
#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEvent {
    asset: String,
    #[serde(default)]
    sensor: Option<String>,
    class: String,
    #[serde(default)]
    mode: Option<String>,
    start: String,
    #[serde(default)]
    end: Option<String>,
    #[serde(default)]
    note: Option<String>,
}

fn validate_event(at: &At<'_>, r: RawEvent) -> Result<Event> {
    if r.asset.trim().is_empty() {
        return Err(at.err("asset", "asset is empty; every event names its asset"));
    }
    let mode = none_if_empty(r.mode);
    let (class, mode) = parse_class_mode(at, &r.class, mode.as_deref(), false)?;
    if class.is_verdict() && mode.is_none() {
        let allowed: Vec<&str> = class.modes().iter().map(|m| m.as_str()).collect();
        return Err(
            at.err("mode", format!("class {class} needs a mode: one of {}", allowed.join(", ")))
        );
    }
    let start = parse_rfc3339(at, "start", &r.start)?;
    let end = match none_if_empty(r.end) {
        None => None,
        Some(e) => Some(parse_rfc3339(at, "end", &e)?),
    };
    if let Some(e) = end
        && e < start
    {
        {
            return Err(at.err(
                "end",
                format!(
                    "end {} is before start {}; swap them or leave end empty",
                    format_time(e),
                    format_time(start)
                ),
            ));
        }
    }
    Ok(Event {
        asset: r.asset,
        sensor: none_if_empty(r.sensor),
        class,
        mode,
        start,
        end,
        note: r.note.unwrap_or_default(),
    })
}

/// Read an event file, the format from its extension.
///
/// # Errors
/// I/O errors, and [`Error::BadInput`] naming file, row and field.
pub fn read_events(path: impl AsRef<Path>) -> Result<Vec<Event>> {
    let path = path.as_ref();
    let format = FileFormat::from_path(path)?;
    if format == FileFormat::Parquet {
        return read_events_parquet(path);
    }
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    read_events_from(BufReader::new(file), format, path)
}

/// A CSV reader whose header row must be exactly `columns`, in order;
/// `wanted` words the error ("columns are ...; {wanted} a,b,c").
fn csv_with_header<R: Read>(
    r: R,
    name: &Path,
    columns: &[&str],
    wanted: &str,
) -> Result<csv::Reader<R>> {
    let mut rdr = csv::ReaderBuilder::new().has_headers(true).from_reader(r);
    let header =
        rdr.headers().map_err(|e| Error::bad_input(name, format!("row 1 (header): {e}")))?;
    let got: Vec<&str> = header.iter().collect();
    if got != columns {
        return Err(Error::bad_input(
            name,
            format!(
                "row 1 (header): columns are {:?}; {wanted} {}",
                got.join(","),
                columns.join(",")
            ),
        ));
    }
    Ok(rdr)
}

/// Read events in a text format from any reader; `name` labels errors.
///
/// # Errors
/// As [`read_events`]; Parquet needs a file, see [`read_events`].
pub fn read_events_from(r: impl Read, format: FileFormat, name: &Path) -> Result<Vec<Event>> {
    match format {
        FileFormat::Csv => {
            let mut rdr = csv_with_header(r, name, &EVENT_COLUMNS, "an event file needs exactly")?;
            let mut out = Vec::new();
            for (i, rec) in rdr.records().enumerate() {
                let at = At { path: name, row: format!("row {} (header is row 1)", i + 2) };
                let rec = rec.map_err(|e| Error::bad_input(name, format!("{}: {e}", at.row)))?;
                let f = |k: usize| rec.get(k).map(str::to_owned);
                let raw = RawEvent {
                    asset: f(0).unwrap_or_default(),
                    sensor: f(1),
                    class: f(2).unwrap_or_default(),
                    mode: f(3),
                    start: f(4).unwrap_or_default(),
                    end: f(5),
                    note: f(6),
                };
                out.push(validate_event(&at, raw)?);
            }
            Ok(out)
        }
        FileFormat::Jsonl => {
            let mut out = Vec::new();
            for (i, line) in BufReader::new(r).lines().enumerate() {
                let line = line.map_err(|e| Error::io(name, e))?;
                if line.trim().is_empty() {
                    continue;
                }
                let at = At { path: name, row: format!("line {}", i + 1) };
                let raw: RawEvent = serde_json::from_str(&line)
                    .map_err(|e| Error::bad_input(name, format!("{}: {e}", at.row)))?;
                out.push(validate_event(&at, raw)?);
            }
            Ok(out)
        }
        FileFormat::Parquet => {
            Err(Error::bad_input(name, "read Parquet event files with read_events(path)"))
        }
    }
}

/// Write events to `path`, the format from its extension.
///
/// # Errors
/// I/O or Parquet errors naming the file.
pub fn write_events(path: impl AsRef<Path>, events: &[Event]) -> Result<()> {
    let path = path.as_ref();
    let format = FileFormat::from_path(path)?;
    atomic_write(path, |w| write_events_to(w, format, events, path))
}

/// Write through a temporary file in the same directory, renamed over `path`
/// only when complete, so an existing file is never left half-written.
pub(crate) fn atomic_write(
    path: &Path,
    write: impl FnOnce(&mut BufWriter<File>) -> Result<()>,
) -> Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => std::path::PathBuf::from("."),
    };
    let tmp = tempfile::Builder::new()
        .prefix(".telltale-")
        .suffix(".tmp")
        .tempfile_in(&dir)
        .map_err(|e| Error::io(&dir, e))?;
    let (file, tmp_path) = tmp.into_parts();
    let mut w = BufWriter::new(file);
    write(&mut w)?;
    let file = w.into_inner().map_err(|e| Error::io(path, e.into_error()))?;
    file.sync_all().map_err(|e| Error::io(path, e))?;
    tmp_path.persist(path).map_err(|e| Error::io(path, e.error))?;
    Ok(())
}

fn opt_time(t: Option<DateTime<Utc>>) -> String {
    t.map(format_time).unwrap_or_default()
}

/// Write events in `format` to any writer; `name` labels errors.
///
/// # Errors
/// I/O or Parquet errors naming `name`.
pub fn write_events_to(
    w: impl Write + Send,
    format: FileFormat,
    events: &[Event],
    name: &Path,
) -> Result<()> {
    let io = |e: std::io::Error| Error::io(name, e);
    match format {
        FileFormat::Csv => {
            let mut wtr = csv::Writer::from_writer(w);
            wtr.write_record(EVENT_COLUMNS).map_err(|e| Error::io(name, e.into()))?;
            for e in events {
                wtr.write_record([
                    e.asset.as_str(),
                    e.sensor.as_deref().unwrap_or(""),
                    e.class.as_str(),
                    e.mode.map(Mode::as_str).unwrap_or(""),
                    &format_time(e.start),
                    &opt_time(e.end),
                    &e.note,
                ])
                .map_err(|e| Error::io(name, e.into()))?;
            }
            wtr.flush().map_err(io)
        }
        FileFormat::Jsonl => {
            let mut w = w;
            for e in events {
                let v = serde_json::json!({
                    "asset": e.asset, "sensor": e.sensor, "class": e.class.as_str(),
                    "mode": e.mode.map(Mode::as_str), "start": format_time(e.start),
                    "end": e.end.map(format_time), "note": e.note,
                });
                writeln!(w, "{v}").map_err(io)?;
            }
            w.flush().map_err(io)
        }
        FileFormat::Parquet => {
            let ts = DataType::Timestamp(TimeUnit::Millisecond, Some("UTC".into()));
            let schema = Arc::new(Schema::new(vec![
                Field::new("asset", DataType::Utf8, false),
                Field::new("sensor", DataType::Utf8, true),
                Field::new("class", DataType::Utf8, false),
                Field::new("mode", DataType::Utf8, true),
                Field::new("start", ts.clone(), false),
                Field::new("end", ts, true),
                Field::new("note", DataType::Utf8, false),
            ]));
            let cols: Vec<ArrayRef> = vec![
                Arc::new(StringArray::from_iter_values(events.iter().map(|e| e.asset.as_str()))),
                Arc::new(StringArray::from_iter(events.iter().map(|e| e.sensor.as_deref()))),
                Arc::new(StringArray::from_iter_values(events.iter().map(|e| e.class.as_str()))),
                Arc::new(StringArray::from_iter(events.iter().map(|e| e.mode.map(Mode::as_str)))),
                Arc::new(
                    TimestampMillisecondArray::from_iter_values(
                        events.iter().map(|e| e.start.timestamp_millis()),
                    )
                    .with_timezone("UTC"),
                ),
                Arc::new(
                    TimestampMillisecondArray::from_iter(
                        events.iter().map(|e| e.end.map(|t| t.timestamp_millis())),
                    )
                    .with_timezone("UTC"),
                ),
                Arc::new(StringArray::from_iter_values(events.iter().map(|e| e.note.as_str()))),
            ];
            write_parquet(w, schema, cols, name)
        }
    }
}

fn write_parquet(
    w: impl Write + Send,
    schema: Arc<Schema>,
    cols: Vec<ArrayRef>,
    name: &Path,
) -> Result<()> {
    let batch = RecordBatch::try_new(schema.clone(), cols)
        .map_err(|e| Error::bad_input(name, format!("building a record batch: {e}")))?;
    let pq = |source| Error::ParquetWrite { path: name.to_path_buf(), source };
    let mut writer = ArrowWriter::try_new(w, schema, None).map_err(pq)?;
    writer.write(&batch).map_err(pq)?;
    writer.close().map_err(pq)?;
    Ok(())
}

fn read_parquet_batches(path: &Path) -> Result<Vec<RecordBatch>> {
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let bad = |e: &dyn std::fmt::Display| {
        Error::bad_input(path, format!("not a readable Parquet file ({e}); re-export it"))
    };
    let reader = ParquetRecordBatchReaderBuilder::try_new(file)
        .map_err(|e| bad(&e))?
        .build()
        .map_err(|e| bad(&e))?;
    reader.map(|b| b.map_err(|e| bad(&e))).collect()
}

fn column<'a>(path: &Path, b: &'a RecordBatch, name: &str) -> Result<&'a ArrayRef> {
    b.column_by_name(name).ok_or_else(|| Error::bad_input(path, format!("missing column `{name}`")))
}

/// Text of row `i` of a string column (Utf8, LargeUtf8, Dictionary) or of a Timestamp column as RFC 3339.
fn text_at(a: &ArrayRef, i: usize) -> Option<String> {
    if a.is_null(i) {
        return None;
    }
    let ms = |v: i64| Some(format_time(crate::time::from_millis(v)));
    match a.data_type() {
        DataType::Utf8 => Some(a.as_string::<i32>().value(i).to_owned()),
        DataType::LargeUtf8 => Some(a.as_string::<i64>().value(i).to_owned()),
        DataType::Timestamp(TimeUnit::Millisecond, _) => {
            ms(a.as_primitive::<TimestampMillisecondType>().value(i))
        }
        DataType::Timestamp(TimeUnit::Second, _) => {
            let secs = a.as_primitive::<TimestampSecondType>().value(i);
            // An overflowing value becomes text that the RFC 3339 check rejects,
            // naming the row and field.
            secs.checked_mul(1000)
                .map_or_else(|| Some(format!("{secs} seconds (out of range)")), ms)
        }
        DataType::Timestamp(TimeUnit::Microsecond, _) => {
            ms(a.as_primitive::<TimestampMicrosecondType>().value(i).div_euclid(1000))
        }
        DataType::Timestamp(TimeUnit::Nanosecond, _) => {
            ms(a.as_primitive::<TimestampNanosecondType>().value(i).div_euclid(1_000_000))
        }
        DataType::Dictionary(_, _) => {
            let d = a.as_any_dictionary();
            let k = *d.normalized_keys().get(i)?;
            text_at(d.values(), k)
        }
        _ => None,
    }
}

fn check_text_type(path: &Path, b: &RecordBatch, name: &str) -> Result<()> {
    let t = column(path, b, name)?.data_type();
    let ok = matches!(
        t,
        DataType::Utf8
            | DataType::LargeUtf8
            | DataType::Timestamp(_, _)
            | DataType::Dictionary(_, _)
    );
    if ok {
        Ok(())
    } else {
        Err(Error::bad_input(path, format!("column `{name}` has type {t}; use Utf8")))
    }
}

fn read_events_parquet(path: &Path) -> Result<Vec<Event>> {
    let mut out = Vec::new();
    let mut row = 0usize;
    for b in read_parquet_batches(path)? {
        for c in EVENT_COLUMNS {
            check_text_type(path, &b, c)?;
        }
        let cols: Vec<&ArrayRef> =
            EVENT_COLUMNS.iter().map(|c| column(path, &b, c)).collect::<Result<_>>()?;
        for i in 0..b.num_rows() {
            row += 1;
            let at = At { path, row: format!("row {row}") };
            let raw = RawEvent {
                asset: text_at(cols[0], i).unwrap_or_default(),
                sensor: text_at(cols[1], i),
                class: text_at(cols[2], i).unwrap_or_default(),
                mode: text_at(cols[3], i),
                start: text_at(cols[4], i).ok_or_else(|| at.err("start", "start is null"))?,
                end: text_at(cols[5], i),
                note: text_at(cols[6], i),
            };
            out.push(validate_event(&at, raw)?);
        }
    }
    Ok(out)
}

/// Text fields of one suspicion, before validation.
#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSuspicion {
    id: String,
    rank: u32,
    asset: String,
    #[serde(default)]
    sensor: Option<String>,
    class: String,
    mode: String,
    score: f64,
    magnitude: f64,
    onset: String,
    detected: String,
    summary: String,
    evidence: Vec<Evidence>,
}

fn validate_suspicion(at: &At<'_>, r: RawSuspicion) -> Result<Suspicion> {
    let (class, mode) = parse_class_mode(at, &r.class, Some(&r.mode), true)?;
    let mode = mode.ok_or_else(|| at.err("mode", "mode is empty"))?;
    if !(0.0..=1.0).contains(&r.score) {
        return Err(at.err("score", format!("score {} is outside 0..1", r.score)));
    }
    if r.rank == 0 {
        return Err(at.err("rank", "rank must be a positive integer (1 = look first), got 0"));
    }
    if !r.magnitude.is_finite() {
        return Err(
            at.err("magnitude", format!("magnitude must be a finite number, got {}", r.magnitude))
        );
    }
    Ok(Suspicion {
        id: r.id,
        rank: r.rank,
        asset: r.asset,
        sensor: none_if_empty(r.sensor),
        class,
        mode,
        score: r.score,
        magnitude: r.magnitude,
        onset: parse_rfc3339(at, "onset", &r.onset)?,
        detected: parse_rfc3339(at, "detected", &r.detected)?,
        summary: r.summary,
        evidence: r.evidence,
    })
}

/// The numbers of a suspicion must be finite (and `score` in 0..1, `rank` >= 1) to be written.
fn check_suspicion_numbers(name: &Path, k: usize, s: &Suspicion) -> Result<()> {
    let bad = |field: &str, v: String| {
        Err(Error::bad_input(
            name,
            format!(
                "suspicion {} (id {}): {field} {v} cannot be written; numbers must be finite, \
                 score in 0..1 and rank >= 1",
                k + 1,
                s.id
            ),
        ))
    };
    if !(0.0..=1.0).contains(&s.score) {
        return bad("score", s.score.to_string());
    }
    if !s.magnitude.is_finite() {
        return bad("magnitude", s.magnitude.to_string());
    }
    if s.rank == 0 {
        return bad("rank", "0".into());
    }
    for e in &s.evidence {
        for (field, v) in [("statistic", e.statistic), ("threshold", e.threshold)] {
            if !v.is_finite() {
                return bad(&format!("evidence `{}` {field}", e.test), v.to_string());
            }
        }
        if let Some(p) = e.p_value.filter(|p| !(0.0..=1.0).contains(p)) {
            return bad(&format!("evidence `{}` p_value", e.test), p.to_string());
        }
    }
    Ok(())
}

fn suspicion_json(s: &Suspicion) -> serde_json::Value {
    serde_json::json!({
        "id": s.id, "rank": s.rank, "asset": s.asset, "sensor": s.sensor,
        "class": s.class.as_str(), "mode": s.mode.as_str(), "score": s.score,
        "magnitude": s.magnitude, "onset": format_time(s.onset), "detected": format_time(s.detected),
        "summary": s.summary, "evidence": s.evidence,
    })
}

fn evidence_json(path: &Path, s: &Suspicion) -> Result<String> {
    serde_json::to_string(&s.evidence).map_err(|e| {
        Error::bad_input(
            path,
            format!("suspicion {}: evidence cannot be written as JSON ({e})", s.id),
        )
    })
}

/// Write suspicions to `path`, the format from its extension.
///
/// # Errors
/// I/O or Parquet errors naming the file.
pub fn write_suspicions(path: impl AsRef<Path>, items: &[Suspicion]) -> Result<()> {
    let path = path.as_ref();
    let format = FileFormat::from_path(path)?;
    atomic_write(path, |w| write_suspicions_to(w, format, items, path))
}

/// Write suspicions in `format` to any writer (stdout included); `name` labels errors.
///
/// # Errors
/// I/O or Parquet errors naming `name`; non-finite numbers in JSON.
pub fn write_suspicions_to(
    w: impl Write + Send,
    format: FileFormat,
    items: &[Suspicion],
    name: &Path,
) -> Result<()> {
    // Check everything before writing anything: JSON has no NaN or infinity
    // (serde_json would write `null`, which no reader accepts back).
    for (k, s) in items.iter().enumerate() {
        check_suspicion_numbers(name, k, s)?;
    }
    let io = |e: std::io::Error| Error::io(name, e);
    match format {
        FileFormat::Jsonl => {
            let mut w = w;
            for s in items {
                writeln!(w, "{}", suspicion_json(s)).map_err(io)?;
            }
            w.flush().map_err(io)
        }
        FileFormat::Csv => {
            let mut wtr = csv::Writer::from_writer(w);
            wtr.write_record(SUSPICION_COLUMNS).map_err(|e| Error::io(name, e.into()))?;
            for s in items {
                wtr.write_record([
                    s.id.clone(),
                    s.rank.to_string(),
                    s.asset.clone(),
                    s.sensor.clone().unwrap_or_default(),
                    s.class.as_str().to_owned(),
                    s.mode.as_str().to_owned(),
                    format!("{:?}", s.score),
                    format!("{:?}", s.magnitude),
                    format_time(s.onset),
                    format_time(s.detected),
                    s.summary.clone(),
                    evidence_json(name, s)?,
                ])
                .map_err(|e| Error::io(name, e.into()))?;
            }
            wtr.flush().map_err(io)
        }
        FileFormat::Parquet => {
            let ts = DataType::Timestamp(TimeUnit::Millisecond, Some("UTC".into()));
            let schema = Arc::new(Schema::new(vec![
                Field::new("id", DataType::Utf8, false),
                Field::new("rank", DataType::UInt32, false),
                Field::new("asset", DataType::Utf8, false),
                Field::new("sensor", DataType::Utf8, true),
                Field::new("class", DataType::Utf8, false),
                Field::new("mode", DataType::Utf8, false),
                Field::new("score", DataType::Float64, false),
                Field::new("magnitude", DataType::Float64, false),
                Field::new("onset", ts.clone(), false),
                Field::new("detected", ts, false),
                Field::new("summary", DataType::Utf8, false),
                Field::new("evidence", DataType::Utf8, false),
            ]));
            let ev: Vec<String> =
                items.iter().map(|s| evidence_json(name, s)).collect::<Result<_>>()?;
            let tms = |f: fn(&Suspicion) -> DateTime<Utc>| {
                Arc::new(
                    TimestampMillisecondArray::from_iter_values(
                        items.iter().map(|s| f(s).timestamp_millis()),
                    )
                    .with_timezone("UTC"),
                ) as ArrayRef
            };
            let cols: Vec<ArrayRef> = vec![
                Arc::new(StringArray::from_iter_values(items.iter().map(|s| s.id.as_str()))),
                Arc::new(UInt32Array::from_iter_values(items.iter().map(|s| s.rank))),
                Arc::new(StringArray::from_iter_values(items.iter().map(|s| s.asset.as_str()))),
                Arc::new(StringArray::from_iter(items.iter().map(|s| s.sensor.as_deref()))),
                Arc::new(StringArray::from_iter_values(items.iter().map(|s| s.class.as_str()))),
                Arc::new(StringArray::from_iter_values(items.iter().map(|s| s.mode.as_str()))),
                Arc::new(Float64Array::from_iter_values(items.iter().map(|s| s.score))),
                Arc::new(Float64Array::from_iter_values(items.iter().map(|s| s.magnitude))),
                tms(|s| s.onset),
                tms(|s| s.detected),
                Arc::new(StringArray::from_iter_values(items.iter().map(|s| s.summary.as_str()))),
                Arc::new(StringArray::from_iter_values(ev.iter().map(String::as_str))),
            ];
            write_parquet(w, schema, cols, name)
        }
    }
}

/// Read a suspicion file, the format from its extension.
///
/// # Errors
/// I/O errors, and [`Error::BadInput`] naming file, row and field.
pub fn read_suspicions(path: impl AsRef<Path>) -> Result<Vec<Suspicion>> {
    let path = path.as_ref();
    let format = FileFormat::from_path(path)?;
    if format == FileFormat::Parquet {
        return read_suspicions_parquet(path);
    }
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    read_suspicions_from(BufReader::new(file), format, path)
}

fn parse_evidence(at: &At<'_>, s: &str) -> Result<Vec<Evidence>> {
    serde_json::from_str(s).map_err(|e| {
        at.err(
            "evidence",
            format!("not a JSON array of {{test, statistic, threshold, p_value?, detail}} ({e})"),
        )
    })
}

/// Read suspicions in a text format from any reader; `name` labels errors.
///
/// # Errors
/// As [`read_suspicions`].
pub fn read_suspicions_from(
    r: impl Read,
    format: FileFormat,
    name: &Path,
) -> Result<Vec<Suspicion>> {
    match format {
        FileFormat::Jsonl => {
            let mut out = Vec::new();
            for (i, line) in BufReader::new(r).lines().enumerate() {
                let line = line.map_err(|e| Error::io(name, e))?;
                if line.trim().is_empty() {
                    continue;
                }
                let at = At { path: name, row: format!("line {}", i + 1) };
                let raw: RawSuspicion = serde_json::from_str(&line)
                    .map_err(|e| Error::bad_input(name, format!("{}: {e}", at.row)))?;
                out.push(validate_suspicion(&at, raw)?);
            }
            Ok(out)
        }
        FileFormat::Csv => {
            let mut rdr = csv_with_header(r, name, &SUSPICION_COLUMNS, "expected")?;
            let mut out = Vec::new();
            for (i, rec) in rdr.records().enumerate() {
                let at = At { path: name, row: format!("row {} (header is row 1)", i + 2) };
                let rec = rec.map_err(|e| Error::bad_input(name, format!("{}: {e}", at.row)))?;
                let f = |k: usize| rec.get(k).unwrap_or("").to_owned();
                let num = |k: usize, field: &str| -> Result<f64> {
                    f(k).trim()
                        .parse()
                        .map_err(|_| at.err(field, format!("{:?} is not a number", f(k))))
                };
                let raw = RawSuspicion {
                    id: f(0),
                    rank: f(1).trim().parse().map_err(|_| {
                        at.err("rank", format!("{:?} is not a positive integer", f(1)))
                    })?,
                    asset: f(2),
                    sensor: Some(f(3)),
                    class: f(4),
                    mode: f(5),
                    score: num(6, "score")?,
                    magnitude: num(7, "magnitude")?,
                    onset: f(8),
                    detected: f(9),
                    summary: f(10),
                    evidence: parse_evidence(&at, &f(11))?,
                };
                out.push(validate_suspicion(&at, raw)?);
            }
            Ok(out)
        }
        FileFormat::Parquet => {
            Err(Error::bad_input(name, "read Parquet suspicion files with read_suspicions(path)"))
        }
    }
}

fn read_suspicions_parquet(path: &Path) -> Result<Vec<Suspicion>> {
    let mut out = Vec::new();
    let mut row = 0usize;
    for b in read_parquet_batches(path)? {
        let cols: Vec<&ArrayRef> =
            SUSPICION_COLUMNS.iter().map(|c| column(path, &b, c)).collect::<Result<_>>()?;
        let rank = cols[1].as_primitive_opt::<UInt32Type>().ok_or_else(|| {
            Error::bad_input(
                path,
                format!("column `rank` has type {}; use UInt32", cols[1].data_type()),
            )
        })?;
        let f64col = |k: usize, n: &str| {
            cols[k].as_primitive_opt::<Float64Type>().ok_or_else(|| {
                Error::bad_input(
                    path,
                    format!("column `{n}` has type {}; use Float64", cols[k].data_type()),
                )
            })
        };
        let (score, magnitude) = (f64col(6, "score")?, f64col(7, "magnitude")?);
        for i in 0..b.num_rows() {
            row += 1;
            let at = At { path, row: format!("row {row}") };
            let t = |k: usize| text_at(cols[k], i).unwrap_or_default();
            let raw = RawSuspicion {
                id: t(0),
                // a null rank or number becomes 0 / NaN, which validation rejects by name
                rank: if rank.is_null(i) { 0 } else { rank.value(i) },
                asset: t(2),
                sensor: text_at(cols[3], i),
                class: t(4),
                mode: t(5),
                score: if score.is_null(i) { f64::NAN } else { score.value(i) },
                magnitude: if magnitude.is_null(i) { f64::NAN } else { magnitude.value(i) },
                onset: t(8),
                detected: t(9),
                summary: t(10),
                evidence: parse_evidence(&at, &t(11))?,
            };
            out.push(validate_suspicion(&at, raw)?);
        }
    }
    Ok(out)
}
