//! Archive import: a plain work-order export (CSV) turned into archived
//! `failure` and `maintenance` events (DESIGN.md 4.3), with every row that
//! could not be used reported with its row number and the reason.
//!
//! [`ImportSettings`] names the columns and the keyword lists;
//! [`ImportSettings::check`] turns it into [`ValidImportSettings`];
//! [`import_workorders`] (or [`import_workorders_from`] on any reader) gives
//! an [`ImportReport`]; [`write_rejects`] writes its unused rows as CSV.
//!
//! # Rules
//!
//! 1. **Header.** The first record is the header. A configured column is
//!    found by its exact name, else by a unique case-insensitive match with
//!    surrounding blanks ignored (`Asset ` finds `asset`). A column that is
//!    not there is a bad-input error naming it and listing the header's
//!    columns. A UTF-8 byte-order mark at the start of the file is ignored.
//! 2. **Row numbers** are what a spreadsheet shows: the header is row 1, the
//!    first data row row 2. A quoted field spanning several lines is still one
//!    row; an empty line between data rows is a row too (it is skipped, not
//!    reported; empty lines before the header are not counted). Rows whose
//!    fields are all blank are skipped and counted in
//!    [`ImportReport::blank_rows`].
//! 3. **Checks, in order; the first failing one is the row's reason**
//!    ([`UnusedReason`]): a field that is not UTF-8; more fields than the
//!    header (usually a delimiter inside an unquoted field); empty asset; an
//!    asset not in the known-asset list (when one is given); empty or
//!    unreadable date; unreadable end (when an end column is configured and
//!    the field is not empty); end before start; no keyword in the text.
//! 4. **Times.** Always accepted: RFC 3339 (`2026-03-02T10:00:00Z`, any
//!    offset, converted to UTC), `YYYY-MM-DD` (midnight), and
//!    `YYYY-MM-DD HH:MM`, `YYYY-MM-DD HH:MM:SS[.fff]` (a space or a `T`
//!    between date and time). **Times without an offset are read as UTC**;
//!    an export in local time is shifted by the local offset. An optional
//!    [`ImportSettings::date_format`] (chrono `strftime` syntax, e.g.
//!    `%d/%m/%Y %H:%M`) is tried first; a format with `%z` reads the offset,
//!    one without is read as UTC, one with only date fields means midnight.
//! 5. **Keywords** are matched case-insensitively as whole words or whole
//!    phrases. Text and keywords are split into words at every character that
//!    is not a letter or digit, so `burnt out` also matches `Burnt-out` and
//!    `burnt  out`, and `aligned` does not match `realigned`.
//! 6. **Precedence.** A row matching a failure keyword is a `failure`, even
//!    when it also matches a maintenance keyword: a failure record usually
//!    describes the repair too ("pump seized, bearing replaced"). A row
//!    matching only maintenance keywords is `maintenance`. Negations are not
//!    understood: "inspected, no leak found" matches `leak` and is a failure;
//!    narrow the lists if the export words inspections that way.
//! 7. **Events.** `asset` trimmed, `sensor` and `mode` empty, `start` the
//!    date, `end` the end column's time (when configured and not empty),
//!    `note` the text trimmed. Output is sorted by asset, then start; rows
//!    with the same asset and start keep their file order.
//!
//! The default keyword lists ([`DEFAULT_FAILURE_WORDS`],
//! [`DEFAULT_MAINTENANCE_WORDS`]) are English and written for pumping
//! equipment; replace them for other wording.
//!
//! ```no_run
//! use telltale_pipelines::jobs::{ImportSettings, import_workorders};
//! let mut settings = ImportSettings::default();
//! settings.asset_column = "Equipment".into();
//! settings.date_format = Some("%d/%m/%Y %H:%M".into());
//! let report = import_workorders("workorders.csv", &settings.check()?)?;
//! println!("{} events, {} rows unused", report.events.len(), report.unused.len());
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

use crate::error::{Error, Result};
use crate::record::{Class, Event};
use chrono::format::{Item, StrftimeItems};
use chrono::{DateTime, NaiveDate, NaiveDateTime, Utc};
use std::collections::{BTreeMap, BTreeSet};
use std::fs::File;
use std::io::{BufReader, Read, Write};
use std::path::Path;

/// Default failure keywords: words a work order uses for a functional failure.
pub const DEFAULT_FAILURE_WORDS: &[&str] = &[
    "fail",
    "failed",
    "fails",
    "failure",
    "seized",
    "seized up",
    "tripped",
    "breakdown",
    "broke down",
    "broken",
    "burnt out",
    "burned out",
    "leak",
    "leaking",
    "leaks",
    "cracked",
    "ruptured",
    "jammed",
    "overheated",
    "short circuit",
    "lost prime",
    "loss of prime",
    "no flow",
    "wont start",
    "won't start",
];

/// Default maintenance keywords: words a work order uses for work done.
pub const DEFAULT_MAINTENANCE_WORDS: &[&str] = &[
    "replaced",
    "replacement",
    "repaired",
    "repair",
    "inspected",
    "inspection",
    "serviced",
    "servicing",
    "greased",
    "lubricated",
    "lubrication",
    "realigned",
    "aligned",
    "alignment",
    "cleaned",
    "overhaul",
    "overhauled",
    "calibrated",
    "calibration",
    "adjusted",
    "tightened",
    "refurbished",
    "rewound",
    "planned maintenance",
    "preventive maintenance",
    "preventative maintenance",
];

/// How to read a work-order export; unchecked, see [`ImportSettings::check`].
///
/// | field | default | meaning |
/// |---|---|---|
/// | `asset_column` | `asset` | column holding the asset id |
/// | `date_column` | `date` | column holding the work order's time (the event start) |
/// | `text_column` | `description` | column holding the free text matched against the keywords |
/// | `end_column` | none | optional column holding the end of the work |
/// | `date_format` | none | extra chrono `strftime` format tried before the built-in forms |
/// | `failure_words` | [`DEFAULT_FAILURE_WORDS`] | keywords of a failure |
/// | `maintenance_words` | [`DEFAULT_MAINTENANCE_WORDS`] | keywords of maintenance work |
/// | `delimiter` | `,` | field delimiter, one ASCII character |
/// | `known_assets` | none | when given, rows on other assets are unused |
#[derive(Debug, Clone, PartialEq)]
pub struct ImportSettings {
    /// Column holding the asset id.
    pub asset_column: String,
    /// Column holding the work order's time.
    pub date_column: String,
    /// Column holding the free text.
    pub text_column: String,
    /// Optional column holding the end of the work.
    pub end_column: Option<String>,
    /// Optional chrono `strftime` format, tried before the built-in forms.
    pub date_format: Option<String>,
    /// Failure keywords (words or phrases).
    pub failure_words: Vec<String>,
    /// Maintenance keywords (words or phrases).
    pub maintenance_words: Vec<String>,
    /// Field delimiter.
    pub delimiter: char,
    /// When given, the only assets accepted.
    pub known_assets: Option<Vec<String>>,
}

impl Default for ImportSettings {
    fn default() -> Self {
        let own = |l: &[&str]| l.iter().map(|s| (*s).to_owned()).collect();
        ImportSettings {
            asset_column: "asset".into(),
            date_column: "date".into(),
            text_column: "description".into(),
            end_column: None,
            date_format: None,
            failure_words: own(DEFAULT_FAILURE_WORDS),
            maintenance_words: own(DEFAULT_MAINTENANCE_WORDS),
            delimiter: ',',
            known_assets: None,
        }
    }
}

/// Settings that [`ImportSettings::check`] refuses.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{0}")]
pub struct InvalidImportSettings(pub String);

/// Checked import settings, from [`ImportSettings::check`].
#[derive(Debug, Clone)]
pub struct ValidImportSettings {
    settings: ImportSettings,
    failure: Vec<Vec<String>>,
    maintenance: Vec<Vec<String>>,
    known: Option<BTreeSet<String>>,
    delimiter: u8,
}

impl ValidImportSettings {
    /// The settings as given.
    pub fn settings(&self) -> &ImportSettings {
        &self.settings
    }
}

/// Lower-case words of `s`, split at every character that is not a letter or digit.
fn words(s: &str) -> Vec<String> {
    s.split(|c: char| !c.is_alphanumeric())
        .filter(|w| !w.is_empty())
        .map(str::to_lowercase)
        .collect()
}

fn compile(list: &[String], what: &str) -> std::result::Result<Vec<Vec<String>>, String> {
    let mut out: Vec<Vec<String>> = Vec::new();
    for k in list {
        let w = words(k);
        if w.is_empty() {
            return Err(format!(
                "{what} keyword {k:?} has no letters or digits; give words such as \"seized\""
            ));
        }
        if !out.contains(&w) {
            out.push(w);
        }
    }
    if out.is_empty() {
        return Err(format!("the {what} keyword list is empty; give at least one keyword"));
    }
    Ok(out)
}

impl ImportSettings {
    /// Check the settings.
    ///
    /// # Errors
    /// [`InvalidImportSettings`] naming the setting: an empty column name,
    /// an empty or blank keyword list, a keyword in both lists, a delimiter
    /// that is not one ASCII character (or is a quote or line break), a date
    /// format chrono cannot read.
    pub fn check(&self) -> std::result::Result<ValidImportSettings, InvalidImportSettings> {
        let bad = |m: String| Err(InvalidImportSettings(m));
        for (name, col) in [
            ("asset_column", Some(&self.asset_column)),
            ("date_column", Some(&self.date_column)),
            ("text_column", Some(&self.text_column)),
            ("end_column", self.end_column.as_ref()),
        ] {
            if col.is_some_and(|c| c.trim().is_empty()) {
                return bad(format!("{name} is empty; give the column's name as in the header"));
            }
        }
        let failure = compile(&self.failure_words, "failure").map_err(InvalidImportSettings)?;
        let maintenance =
            compile(&self.maintenance_words, "maintenance").map_err(InvalidImportSettings)?;
        if let Some(both) = failure.iter().find(|k| maintenance.contains(k)) {
            return bad(format!(
                "keyword {:?} is in both the failure and the maintenance list; keep it in one",
                both.join(" ")
            ));
        }
        let d = self.delimiter;
        if !d.is_ascii() || matches!(d, '"' | '\n' | '\r') {
            return bad(format!(
                "delimiter {d:?} is not usable; give one ASCII character such as ',' ';' or a tab"
            ));
        }
        if let Some(f) = &self.date_format {
            if f.trim().is_empty() {
                return bad("date_format is empty; give a chrono strftime format such as \
                            %d/%m/%Y %H:%M, or none"
                    .into());
            }
            if StrftimeItems::new(f).any(|i| matches!(i, Item::Error)) {
                return bad(format!(
                    "date_format {f:?} is not a valid chrono strftime format; e.g. %d/%m/%Y %H:%M"
                ));
            }
        }
        let known = self
            .known_assets
            .as_ref()
            .map(|l| l.iter().map(|a| a.trim().to_owned()).collect::<BTreeSet<_>>());
        Ok(ValidImportSettings {
            settings: self.clone(),
            failure,
            maintenance,
            known,
            delimiter: d as u8,
        })
    }
}

/// Why a row was not used (the first failing check, see the module's rules).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
#[non_exhaustive]
pub enum UnusedReason {
    /// A field is not valid UTF-8.
    NotUtf8,
    /// More fields than the header.
    ExtraFields,
    /// The asset field is empty.
    MissingAsset,
    /// The asset is not in the known-asset list.
    UnknownAsset,
    /// The date field is empty or unreadable.
    BadDate,
    /// The end field is not empty and unreadable.
    BadEnd,
    /// The end is before the start.
    EndBeforeStart,
    /// No failure or maintenance keyword in the text.
    NoKeyword,
}

impl UnusedReason {
    /// Short snake_case label, as in the rejects file.
    pub fn as_str(self) -> &'static str {
        match self {
            UnusedReason::NotUtf8 => "not_utf8",
            UnusedReason::ExtraFields => "extra_fields",
            UnusedReason::MissingAsset => "missing_asset",
            UnusedReason::UnknownAsset => "unknown_asset",
            UnusedReason::BadDate => "bad_date",
            UnusedReason::BadEnd => "bad_end",
            UnusedReason::EndBeforeStart => "end_before_start",
            UnusedReason::NoKeyword => "no_keyword",
        }
    }
}

impl std::fmt::Display for UnusedReason {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// One row of the export that gave no event.
#[derive(Debug, Clone, PartialEq)]
pub struct UnusedRow {
    /// Row number as a spreadsheet shows it (header = row 1).
    pub row: u64,
    /// Why.
    pub reason: UnusedReason,
    /// What is wrong, naming the column and the value, and what to do.
    pub detail: String,
    /// The row's fields as read (invalid UTF-8 replaced by U+FFFD).
    pub fields: Vec<String>,
}

/// What an import gave.
#[derive(Debug, Clone, PartialEq)]
pub struct ImportReport {
    /// The header's column names, in order.
    pub header: Vec<String>,
    /// Data rows read, blank rows not counted.
    pub rows_read: usize,
    /// Rows whose fields were all blank, skipped.
    pub blank_rows: usize,
    /// The export's delimiter (joins surplus fields in the rejects file).
    pub delimiter: char,
    /// The events, sorted by asset then start.
    pub events: Vec<Event>,
    /// Rows that gave no event, in file order.
    pub unused: Vec<UnusedRow>,
}

impl ImportReport {
    /// Number of events of `class`.
    pub fn count(&self, class: Class) -> usize {
        self.events.iter().filter(|e| e.class == class).count()
    }

    /// Unused rows per reason.
    pub fn unused_by_reason(&self) -> BTreeMap<UnusedReason, usize> {
        let mut m = BTreeMap::new();
        for u in &self.unused {
            *m.entry(u.reason).or_insert(0) += 1;
        }
        m
    }
}

/// The accepted time forms, for messages.
fn accepted_forms(custom: Option<&str>) -> String {
    let builtin = "RFC 3339 (2026-03-02T10:00:00Z), YYYY-MM-DD, YYYY-MM-DD HH:MM or \
                   YYYY-MM-DD HH:MM:SS (no offset = UTC)";
    match custom {
        Some(f) => format!("the date format {f:?}, {builtin}"),
        None => format!(
            "{builtin}; for another layout set a date format (chrono strftime, e.g. %d/%m/%Y)"
        ),
    }
}

/// Parse a time by the custom format first, then the built-in forms (module rule 4).
fn parse_when(s: &str, custom: Option<&str>) -> Option<DateTime<Utc>> {
    let s = s.trim();
    if let Some(f) = custom {
        if let Ok(t) = DateTime::parse_from_str(s, f) {
            return Some(t.to_utc());
        }
        if let Ok(t) = NaiveDateTime::parse_from_str(s, f) {
            return Some(t.and_utc());
        }
        if let Ok(d) = NaiveDate::parse_from_str(s, f) {
            return d.and_hms_opt(0, 0, 0).map(|t| t.and_utc());
        }
    }
    if let Ok(t) = DateTime::parse_from_rfc3339(s) {
        return Some(t.to_utc());
    }
    for f in ["%Y-%m-%d %H:%M:%S%.f", "%Y-%m-%dT%H:%M:%S%.f", "%Y-%m-%d %H:%M", "%Y-%m-%dT%H:%M"] {
        if let Ok(t) = NaiveDateTime::parse_from_str(s, f) {
            return Some(t.and_utc());
        }
    }
    NaiveDate::parse_from_str(s, "%Y-%m-%d").ok()?.and_hms_opt(0, 0, 0).map(|t| t.and_utc())
}

/// Whether the word sequence `phrase` occurs in `text` as consecutive words.
fn contains_phrase(text: &[String], phrase: &[String]) -> bool {
    !phrase.is_empty() && text.windows(phrase.len()).any(|w| w == phrase)
}

/// The class the text's keywords give (module rules 5 and 6).
fn classify(text: &str, s: &ValidImportSettings) -> Option<Class> {
    let w = words(text);
    if s.failure.iter().any(|k| contains_phrase(&w, k)) {
        Some(Class::Failure)
    } else if s.maintenance.iter().any(|k| contains_phrase(&w, k)) {
        Some(Class::Maintenance)
    } else {
        None
    }
}

/// Column index of `name` in `header` (module rule 1).
fn find_column(header: &[String], name: &str, what: &str, file: &Path) -> Result<usize> {
    if let Some(i) = header.iter().position(|h| h == name) {
        return Ok(i);
    }
    let want = name.trim().to_lowercase();
    let loose: Vec<usize> =
        (0..header.len()).filter(|&i| header[i].trim().to_lowercase() == want).collect();
    let listed = header.iter().map(|h| format!("{h:?}")).collect::<Vec<_>>().join(", ");
    let hint = match header {
        [only] => [';', ',', '\t', '|']
            .into_iter()
            .find(|d| only.contains(*d))
            .map(|d| format!(" (one column holding {d:?}: the export may use {d:?} as delimiter)"))
            .unwrap_or_default(),
        _ => String::new(),
    };
    match loose.as_slice() {
        [i] => Ok(*i),
        [] => Err(Error::bad_input(
            file,
            format!(
                "row 1 (header): no column {name:?} for the {what}; the header's columns are \
                 {listed}{hint}; name the right column or rename it in the export"
            ),
        )),
        _ => Err(Error::bad_input(
            file,
            format!(
                "row 1 (header): several columns match {name:?} for the {what} when case and \
                 blanks are ignored ({listed}); give the exact name"
            ),
        )),
    }
}

/// Import a work-order export from a file.
///
/// # Errors
/// I/O errors, and [`Error::BadInput`] for an empty file or a configured
/// column missing from the header. Bad rows are not errors: they are listed
/// in [`ImportReport::unused`].
pub fn import_workorders(
    path: impl AsRef<Path>,
    settings: &ValidImportSettings,
) -> Result<ImportReport> {
    let path = path.as_ref();
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    import_workorders_from(BufReader::new(file), path, settings)
}

/// [`import_workorders`] from any reader; `name` labels errors.
///
/// # Errors
/// As [`import_workorders`].
pub fn import_workorders_from(
    r: impl Read,
    name: &Path,
    settings: &ValidImportSettings,
) -> Result<ImportReport> {
    let s = &settings.settings;
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .delimiter(settings.delimiter)
        .from_reader(r);
    let csv_err = |e: csv::Error| match e.into_kind() {
        csv::ErrorKind::Io(e) => Error::io(name, e),
        other => Error::bad_input(name, format!("reading CSV: {other:?}")),
    };
    let mut rec = csv::ByteRecord::new();
    if !rdr.read_byte_record(&mut rec).map_err(csv_err)? {
        return Err(Error::bad_input(
            name,
            format!(
                "the file is empty; expected a header row naming the columns {:?}, {:?} and {:?}",
                s.asset_column, s.date_column, s.text_column
            ),
        ));
    }
    // Spreadsheet rows: csv skips empty lines, so each record's row comes
    // from the lines its read consumed (module rule 2): the empty lines
    // before it, its own line, and the line breaks inside its fields. Only
    // differences of positions are used: with CRLF line ends the reader's
    // line count lags by one, the same lag after every record.
    let mut after = rdr.position().line();
    let mut row: u64 = 1;
    let mut header: Vec<String> = Vec::with_capacity(rec.len());
    for (i, f) in rec.iter().enumerate() {
        let text = std::str::from_utf8(f).map_err(|_| {
            Error::bad_input(
                name,
                format!(
                    "row 1 (header), column {}: not valid UTF-8; save the export as UTF-8",
                    i + 1
                ),
            )
        })?;
        let text = if i == 0 { text.trim_start_matches('\u{feff}') } else { text };
        header.push(text.to_owned());
    }
    let asset_i = find_column(&header, &s.asset_column, "asset", name)?;
    let date_i = find_column(&header, &s.date_column, "date", name)?;
    let text_i = find_column(&header, &s.text_column, "text", name)?;
    let end_i = match &s.end_column {
        Some(c) => Some(find_column(&header, c, "end", name)?),
        None => None,
    };

    let mut report = ImportReport {
        header,
        rows_read: 0,
        blank_rows: 0,
        delimiter: s.delimiter,
        events: Vec::new(),
        unused: Vec::new(),
    };
    while rdr.read_byte_record(&mut rec).map_err(csv_err)? {
        let now = rdr.position().line();
        row += 1 + now.saturating_sub(after).saturating_sub(1 + newlines(&rec));
        after = now;
        let fields: Vec<String> =
            rec.iter().map(|f| String::from_utf8_lossy(f).into_owned()).collect();
        if fields.iter().all(|f| f.trim().is_empty()) {
            report.blank_rows += 1;
            continue;
        }
        report.rows_read += 1;
        match judge_row(&rec, &fields, &report.header, settings, (asset_i, date_i, text_i, end_i)) {
            Ok(event) => report.events.push(event),
            Err((reason, detail)) => {
                let detail = format!("row {row}: {detail}");
                report.unused.push(UnusedRow { row, reason, detail, fields });
            }
        }
    }
    report.events.sort_by(|a, b| a.asset.cmp(&b.asset).then(a.start.cmp(&b.start)));
    Ok(report)
}

/// Line breaks inside a record's fields (quoted multi-line fields).
fn newlines(rec: &csv::ByteRecord) -> u64 {
    rec.iter().map(|f| f.iter().filter(|&&b| b == b'\n').count() as u64).sum()
}

/// One data row: its event, or the reason it gives none (module rule 3).
fn judge_row(
    rec: &csv::ByteRecord,
    fields: &[String],
    header: &[String],
    settings: &ValidImportSettings,
    (asset_i, date_i, text_i, end_i): (usize, usize, usize, Option<usize>),
) -> std::result::Result<Event, (UnusedReason, String)> {
    let s = &settings.settings;
    let custom = s.date_format.as_deref();
    if let Some(i) = rec.iter().position(|f| std::str::from_utf8(f).is_err()) {
        let col = header.get(i).map_or_else(|| format!("column {}", i + 1), |h| format!("{h:?}"));
        return Err((
            UnusedReason::NotUtf8,
            format!("field {col} is not valid UTF-8; save the export as UTF-8"),
        ));
    }
    if fields.len() > header.len() && fields[header.len()..].iter().any(|f| !f.trim().is_empty()) {
        return Err((
            UnusedReason::ExtraFields,
            format!(
                "{} fields but the header has {}; a field probably holds the delimiter \
                 unquoted (extra: {:?}); quote that field in the export",
                fields.len(),
                header.len(),
                fields[header.len()..].join(&(s.delimiter.to_string()))
            ),
        ));
    }
    let get = |i: usize| fields.get(i).map_or("", |f| f.trim());
    let asset = get(asset_i);
    if asset.is_empty() {
        return Err((
            UnusedReason::MissingAsset,
            format!("field {:?} (asset) is empty; every event needs its asset", s.asset_column),
        ));
    }
    if let Some(known) = &settings.known
        && !known.contains(asset)
    {
        return Err((
            UnusedReason::UnknownAsset,
            format!(
                "field {:?}: asset {asset:?} is not in the fleet; fix the id or add the asset \
                 to the registry",
                s.asset_column
            ),
        ));
    }
    let date = get(date_i);
    if date.is_empty() {
        return Err((
            UnusedReason::BadDate,
            format!("field {:?} (date) is empty; every event needs its time", s.date_column),
        ));
    }
    let Some(start) = parse_when(date, custom) else {
        return Err((
            UnusedReason::BadDate,
            format!(
                "field {:?}: cannot read the date {date:?}; accepted: {}",
                s.date_column,
                accepted_forms(custom)
            ),
        ));
    };
    let mut end = None;
    if let (Some(i), Some(col)) = (end_i, s.end_column.as_deref()) {
        let raw = get(i);
        if !raw.is_empty() {
            let Some(e) = parse_when(raw, custom) else {
                return Err((
                    UnusedReason::BadEnd,
                    format!(
                        "field {col:?}: cannot read the end {raw:?}; accepted: {}; or leave it \
                         empty",
                        accepted_forms(custom)
                    ),
                ));
            };
            if e < start {
                return Err((
                    UnusedReason::EndBeforeStart,
                    format!(
                        "field {col:?}: end {raw:?} is before the start {date:?} in {:?}; \
                         swap them or leave the end empty",
                        s.date_column
                    ),
                ));
            }
            end = Some(e);
        }
    }
    let text = get(text_i);
    let Some(class) = classify(text, settings) else {
        let what = if text.is_empty() {
            "is empty".to_owned()
        } else {
            format!("{text:?} has no failure or maintenance keyword")
        };
        return Err((
            UnusedReason::NoKeyword,
            format!(
                "field {:?} (text) {what}; add the wording this export uses to the keyword lists",
                s.text_column
            ),
        ));
    };
    Ok(Event {
        asset: asset.to_owned(),
        sensor: None,
        class,
        mode: None,
        start,
        end,
        note: text.to_owned(),
    })
}

/// Write the unused rows as CSV to `path`, atomically (a temporary file in
/// the same directory, renamed over `path` when complete).
///
/// Columns: `row`, `reason` ([`UnusedReason::as_str`]), `detail`, then the
/// export's own columns with the row's original fields; when some row has
/// more fields than the header, a last column `extra_fields` holds the
/// surplus joined by the export's delimiter. Always comma-delimited.
///
/// # Errors
/// I/O errors naming the file.
pub fn write_rejects(path: impl AsRef<Path>, report: &ImportReport) -> Result<()> {
    let path = path.as_ref();
    crate::io::records::atomic_write(path, |w| write_rejects_to(w, report, path))
}

/// [`write_rejects`] to any writer; `name` labels errors.
///
/// # Errors
/// I/O errors naming `name`.
pub fn write_rejects_to(w: impl Write, report: &ImportReport, name: &Path) -> Result<()> {
    let io = |e: csv::Error| Error::io(name, e.into());
    let width = report.header.len();
    let extra = report.unused.iter().any(|u| u.fields.len() > width);
    let mut wtr = csv::Writer::from_writer(w);
    let mut head: Vec<&str> = vec!["row", "reason", "detail"];
    head.extend(report.header.iter().map(String::as_str));
    if extra {
        head.push("extra_fields");
    }
    wtr.write_record(&head).map_err(io)?;
    for u in &report.unused {
        let mut out: Vec<String> =
            vec![u.row.to_string(), u.reason.as_str().into(), u.detail.clone()];
        out.extend((0..width).map(|i| u.fields.get(i).cloned().unwrap_or_default()));
        if extra {
            out.push(
                u.fields
                    .get(width..)
                    .map(|x| x.join(&report.delimiter.to_string()))
                    .unwrap_or_default(),
            );
        }
        wtr.write_record(&out).map_err(io)?;
    }
    wtr.flush().map_err(|e| Error::io(name, e))
}

#[cfg(test)]
mod tests {
    //! Small hand-made exports. Epoch seconds of the expected times were
    //! computed outside the project with Python 3's
    //! `datetime.fromisoformat(s).timestamp()`; the record splitting of the
    //! quoted multi-line case was checked with Python's `csv.reader`.
    use super::*;

    fn run(csv: &str, s: &ImportSettings) -> ImportReport {
        import_workorders_from(csv.as_bytes(), Path::new("wo.csv"), &s.check().unwrap()).unwrap()
    }

    fn run_default(csv: &str) -> ImportReport {
        run(csv, &ImportSettings::default())
    }

    fn classes(r: &ImportReport) -> Vec<(String, Class)> {
        r.events.iter().map(|e| (e.note.clone(), e.class)).collect()
    }

    #[test]
    fn failure_and_maintenance_are_told_apart() {
        let r = run_default(
            "asset,date,description\n\
             p1,2026-03-02,Pump SEIZED on start\n\
             p1,2026-03-03,Greased bearings\n\
             p1,2026-03-04,Realigned coupling\n\
             p1,2026-03-05,Burnt-out motor winding\n\
             p1,2026-03-06,failsafe check\n",
        );
        assert_eq!(
            classes(&r),
            vec![
                ("Pump SEIZED on start".to_owned(), Class::Failure),
                ("Greased bearings".to_owned(), Class::Maintenance),
                ("Realigned coupling".to_owned(), Class::Maintenance),
                ("Burnt-out motor winding".to_owned(), Class::Failure),
            ]
        );
        // "failsafe" is one word: "fail" must not match inside it
        assert_eq!(r.unused.len(), 1);
        assert_eq!(r.unused[0].row, 6);
        assert_eq!(r.unused[0].reason, UnusedReason::NoKeyword);
        assert!(r.unused[0].detail.contains("\"failsafe check\""), "{}", r.unused[0].detail);
        assert_eq!(r.count(Class::Failure), 2);
        assert_eq!(r.count(Class::Maintenance), 2);
    }

    #[test]
    fn failure_wins_over_maintenance() {
        let r = run_default(
            "asset,date,description\n\
             p1,2026-03-02,\"Bearing replaced, pump had seized\"\n\
             p1,2026-03-03,Bearing replaced\n",
        );
        assert_eq!(r.events[0].class, Class::Failure);
        assert_eq!(r.events[1].class, Class::Maintenance);
    }

    #[test]
    fn keywords_are_whole_words_and_phrases() {
        let s = ImportSettings {
            failure_words: vec!["Lost Prime".into()],
            maintenance_words: vec!["aligned".into()],
            ..ImportSettings::default()
        };
        let r = run(
            "asset,date,description\n\
             p1,2026-03-02,pump lost  prime overnight\n\
             p1,2026-03-03,prime lost\n\
             p1,2026-03-04,realigned\n\
             p1,2026-03-05,re-aligned motor\n\
             p1,2026-03-06,seized\n",
            &s,
        );
        assert_eq!(
            classes(&r),
            vec![
                ("pump lost  prime overnight".to_owned(), Class::Failure),
                ("re-aligned motor".to_owned(), Class::Maintenance),
            ]
        );
        // the replaced lists no longer hold "seized"
        let rows: Vec<u64> = r.unused.iter().map(|u| u.row).collect();
        assert_eq!(rows, vec![3, 4, 6]);
    }

    #[test]
    fn date_forms() {
        let r = run_default(
            "asset,date,description\n\
             a,2026-03-02T10:00:00Z,seized\n\
             b,2026-03-02T12:30:00+02:00,seized\n\
             c,2026-03-02,seized\n\
             d,2026-03-02 08:15,seized\n\
             e,2026-03-02 08:15:42,seized\n\
             f,2026-03-02T08:15,seized\n\
             g,02/03/2026,seized\n",
        );
        let secs: Vec<(&str, i64)> =
            r.events.iter().map(|e| (e.asset.as_str(), e.start.timestamp())).collect();
        // Python: datetime.fromisoformat(...).timestamp(), naive forms taken as +00:00
        assert_eq!(
            secs,
            vec![
                ("a", 1_772_445_600),
                ("b", 1_772_447_400),
                ("c", 1_772_409_600),
                ("d", 1_772_439_300),
                ("e", 1_772_439_342),
                ("f", 1_772_439_300),
            ]
        );
        assert_eq!(r.unused.len(), 1);
        let u = &r.unused[0];
        assert_eq!((u.row, u.reason), (8, UnusedReason::BadDate));
        assert!(u.detail.contains("\"02/03/2026\""), "{}", u.detail);
        assert!(u.detail.contains("RFC 3339") && u.detail.contains("YYYY-MM-DD"), "{}", u.detail);
        assert!(u.detail.contains("field \"date\""), "{}", u.detail);
    }

    #[test]
    fn custom_date_format_is_tried_first() {
        let s = ImportSettings { date_format: Some("%d/%m/%Y %H:%M".into()), ..Default::default() };
        let r = run(
            "asset,date,description\n\
             a,03/04/2026 07:05,seized\n\
             b,2026-03-02,seized\n\
             c,03/04/2026,seized\n",
            &s,
        );
        // Python: 2026-04-03T07:05:00+00:00 -> 1775199900; 2026-03-02 -> 1772409600
        let secs: Vec<i64> = r.events.iter().map(|e| e.start.timestamp()).collect();
        assert_eq!(secs, vec![1_775_199_900, 1_772_409_600]);
        assert_eq!(r.unused[0].row, 4);
        assert!(r.unused[0].detail.contains("%d/%m/%Y %H:%M"), "{}", r.unused[0].detail);

        let date_only =
            ImportSettings { date_format: Some("%d.%m.%Y".into()), ..Default::default() };
        let r = run("asset,date,description\na,02.03.2026,seized\n", &date_only);
        assert_eq!(r.events[0].start.timestamp(), 1_772_409_600);
    }

    #[test]
    fn row_numbers_follow_the_spreadsheet() {
        // records: header (row 1), a (2, spans three lines), an empty line (3),
        // b (4), c (5); Python's csv.reader gives the same five records, the
        // empty line as an empty one
        let r = run_default(
            "asset,date,description\n\
             a,2026-03-02,\"line one\nline two\nline three\"\n\
             \n\
             b,2026-03-02,nothing here\n\
             c,,seized\n",
        );
        assert_eq!(r.rows_read, 3);
        let rows: Vec<(u64, UnusedReason)> = r.unused.iter().map(|u| (u.row, u.reason)).collect();
        assert_eq!(
            rows,
            vec![
                (2, UnusedReason::NoKeyword),
                (4, UnusedReason::NoKeyword),
                (5, UnusedReason::BadDate)
            ]
        );
        assert!(
            r.unused[2].detail.starts_with("row 5: field \"date\" (date) is empty"),
            "{}",
            r.unused[2].detail
        );
    }

    #[test]
    fn row_numbers_with_crlf_and_a_last_row_without_line_break() {
        // the same layout as above with CRLF line ends and no line break
        // after the last row
        let r = run_default(
            "asset,date,description\r\n\
             a,2026-03-02,\"line one\r\nline two\"\r\n\
             \r\n\
             b,2026-03-02,nothing here\r\n\
             c,,seized",
        );
        let rows: Vec<u64> = r.unused.iter().map(|u| u.row).collect();
        assert_eq!(rows, vec![2, 4, 5]);
        assert_eq!(r.unused[0].fields[2], "line one\r\nline two");
    }

    #[test]
    fn quoted_fields_keep_commas_and_newlines() {
        let r = run_default(
            "asset,date,description\n\
             p1,2026-03-02,\"  Seal leaking, pump stopped;\nseal replaced  \"\n",
        );
        assert_eq!(r.events.len(), 1);
        assert_eq!(r.events[0].note, "Seal leaking, pump stopped;\nseal replaced");
        assert_eq!(r.events[0].class, Class::Failure);
    }

    #[test]
    fn missing_column_names_it_and_lists_the_header() {
        let s = ImportSettings::check(&ImportSettings::default()).unwrap();
        let e = import_workorders_from(
            "Equipment,date,description\np1,2026-03-02,seized\n".as_bytes(),
            Path::new("wo.csv"),
            &s,
        )
        .unwrap_err();
        assert!(e.is_bad_input());
        let m = e.to_string();
        assert!(m.starts_with("wo.csv: row 1 (header): no column \"asset\""), "{m}");
        assert!(m.contains("\"Equipment\", \"date\", \"description\""), "{m}");

        let end = ImportSettings { end_column: Some("finished".into()), ..Default::default() };
        let e = import_workorders_from(
            "asset,date,description\n".as_bytes(),
            Path::new("wo.csv"),
            &end.check().unwrap(),
        )
        .unwrap_err();
        assert!(e.to_string().contains("no column \"finished\" for the end"), "{e}");

        let e = import_workorders_from("".as_bytes(), Path::new("wo.csv"), &s).unwrap_err();
        assert!(e.to_string().contains("the file is empty"), "{e}");

        let e =
            import_workorders_from("asset;date;description\n".as_bytes(), Path::new("wo.csv"), &s)
                .unwrap_err();
        assert!(e.to_string().contains("may use ';' as delimiter"), "{e}");
    }

    #[test]
    fn header_match_ignores_case_and_blanks_unless_ambiguous() {
        let r = run_default("Asset , DATE,Description\np1,2026-03-02,seized\n");
        assert_eq!(r.events.len(), 1);
        let s = ImportSettings::default().check().unwrap();
        let e = import_workorders_from(
            "Asset,ASSET,date,description\n".as_bytes(),
            Path::new("wo.csv"),
            &s,
        )
        .unwrap_err();
        assert!(e.to_string().contains("several columns match \"asset\""), "{e}");
    }

    #[test]
    fn byte_order_mark_is_ignored() {
        let r = run_default("\u{feff}asset,date,description\np1,2026-03-02,seized\n");
        assert_eq!(r.header[0], "asset");
        assert_eq!(r.events.len(), 1);
        assert_eq!(r.events[0].asset, "p1");
    }

    #[test]
    fn end_column_known_assets_and_missing_asset() {
        let s = ImportSettings {
            end_column: Some("finished".into()),
            known_assets: Some(vec!["p1".into(), "p2".into()]),
            ..Default::default()
        };
        let r = run(
            "asset,date,finished,description\n\
             p2,2026-03-03,2026-03-04T06:00:00Z,bearing replaced\n\
             p1,2026-03-02 10:00,,pump tripped\n\
             p9,2026-03-02,,pump tripped\n\
             ,2026-03-02,,pump tripped\n\
             p1,2026-03-05,2026-03-04,greased\n\
             p1,2026-03-05,soon,greased\n\
             p1,2026-03-01,2026-03-01,greased\n",
            &s,
        );
        // sorted by asset then start: p1 03-01, p1 03-02, p2 03-03
        let got: Vec<(&str, String, Option<String>)> = r
            .events
            .iter()
            .map(|e| {
                (
                    e.asset.as_str(),
                    crate::time::format_time(e.start),
                    e.end.map(crate::time::format_time),
                )
            })
            .collect();
        assert_eq!(
            got,
            vec![
                ("p1", "2026-03-01T00:00:00Z".to_owned(), Some("2026-03-01T00:00:00Z".to_owned())),
                ("p1", "2026-03-02T10:00:00Z".to_owned(), None),
                ("p2", "2026-03-03T00:00:00Z".to_owned(), Some("2026-03-04T06:00:00Z".to_owned())),
            ]
        );
        assert!(r.events.iter().all(|e| e.sensor.is_none() && e.mode.is_none()));
        let rows: Vec<(u64, UnusedReason)> = r.unused.iter().map(|u| (u.row, u.reason)).collect();
        assert_eq!(
            rows,
            vec![
                (4, UnusedReason::UnknownAsset),
                (5, UnusedReason::MissingAsset),
                (6, UnusedReason::EndBeforeStart),
                (7, UnusedReason::BadEnd),
            ]
        );
        assert!(
            r.unused[0].detail.contains("\"p9\" is not in the fleet"),
            "{}",
            r.unused[0].detail
        );
        assert!(r.unused[2].detail.contains("\"2026-03-04\" is before the start"));
        let by = r.unused_by_reason();
        assert_eq!(by.get(&UnusedReason::BadEnd), Some(&1));
        assert_eq!(by.values().sum::<usize>(), 4);
    }

    #[test]
    fn delimiter_extra_fields_blank_rows_and_bad_utf8() {
        let s = ImportSettings { delimiter: ';', ..Default::default() };
        let mut bytes = b"asset;date;description\n\
             p1;2026-03-02;seized, replaced\n\
             p1;2026-03-03;seized;oops\n\
             ;;\n\
             p1;2026-03-04;trailing empty;\n\
             p1;2026-03-05;leak \xff\n"
            .to_vec();
        bytes.extend_from_slice(b"p1;2026-03-06;greased;\n");
        let r =
            import_workorders_from(&bytes[..], Path::new("wo.csv"), &s.check().unwrap()).unwrap();
        assert_eq!(r.rows_read, 5);
        assert_eq!(r.blank_rows, 1);
        assert_eq!(
            classes(&r),
            vec![
                ("seized, replaced".to_owned(), Class::Failure),
                ("greased".to_owned(), Class::Maintenance),
            ]
        );
        let rows: Vec<(u64, UnusedReason)> = r.unused.iter().map(|u| (u.row, u.reason)).collect();
        assert_eq!(
            rows,
            vec![
                (3, UnusedReason::ExtraFields),
                (5, UnusedReason::NoKeyword),
                (6, UnusedReason::NotUtf8),
            ]
        );
        assert!(r.unused[0].detail.contains("(extra: \"oops\")"), "{}", r.unused[0].detail);
        assert!(r.unused[2].detail.contains("\"description\" is not valid UTF-8"));
        assert_eq!(r.unused[2].fields[2], "leak \u{fffd}");

        let mut out = Vec::new();
        write_rejects_to(&mut out, &r, Path::new("rejects.csv")).unwrap();
        let text = String::from_utf8(out).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines[0], "row,reason,detail,asset,date,description,extra_fields");
        assert!(lines[1].starts_with("3,extra_fields,"), "{}", lines[1]);
        assert!(lines[1].ends_with(",p1,2026-03-03,seized,oops"), "{}", lines[1]);
        assert!(lines[2].ends_with(",p1,2026-03-04,trailing empty,"), "{}", lines[2]);
        assert_eq!(lines.len(), 4);
    }

    #[test]
    fn settings_are_checked() {
        let err = |s: ImportSettings| s.check().unwrap_err().0;
        let m = err(ImportSettings {
            failure_words: vec!["Seized".into()],
            maintenance_words: vec!["seized".into()],
            ..Default::default()
        });
        assert!(m.contains("\"seized\" is in both"), "{m}");
        let m = err(ImportSettings { failure_words: vec![], ..Default::default() });
        assert!(m.contains("failure keyword list is empty"), "{m}");
        let m = err(ImportSettings { maintenance_words: vec![" - ".into()], ..Default::default() });
        assert!(m.contains("no letters or digits"), "{m}");
        let m = err(ImportSettings { delimiter: '"', ..Default::default() });
        assert!(m.contains("delimiter"), "{m}");
        let m = err(ImportSettings { delimiter: 'é', ..Default::default() });
        assert!(m.contains("delimiter"), "{m}");
        let m = err(ImportSettings { date_format: Some("%d/%Q".into()), ..Default::default() });
        assert!(m.contains("not a valid chrono strftime format"), "{m}");
        let m = err(ImportSettings { text_column: " ".into(), ..Default::default() });
        assert!(m.contains("text_column is empty"), "{m}");
        assert!(ImportSettings::default().check().is_ok());
        assert!(ImportSettings { delimiter: '\t', ..Default::default() }.check().is_ok());
    }

    #[test]
    fn each_default_keyword_gives_its_own_class() {
        let s = ImportSettings::default().check().unwrap();
        for w in DEFAULT_FAILURE_WORDS {
            assert_eq!(classify(&format!("pump {w} today"), &s), Some(Class::Failure), "{w}");
        }
        for w in DEFAULT_MAINTENANCE_WORDS {
            assert_eq!(classify(&format!("pump {w} today"), &s), Some(Class::Maintenance), "{w}");
        }
        assert_eq!(classify("pump ran normally", &s), None);
    }
}
