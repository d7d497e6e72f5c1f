//! Detection quality: suspicions (DESIGN.md 4.4) scored against ground-truth
//! events (4.3) over an evaluation span `[from, to)`.
//!
//! [`evaluate`] is pure computation on records already read; [`read_outages`]
//! reads the optional whole-asset outage file (`asset,start,end[,note]`, the
//! demo's `outages.csv`). The result, an [`EvaluationReport`], serialises to
//! JSON ([`EvaluationReport::to_json`]).
//!
//! # Rules
//!
//! Times are compared as instants; "grace" is [`EvaluateSettings::grace`]
//! (default 24 h), "onset tolerance" [`EvaluateSettings::onset_tolerance`]
//! (default 24 h).
//!
//! 1. **Suspicions in span.** Only suspicions with `detected` in `[from, to)`
//!    take part (a scan reports nothing else); the others are counted in
//!    [`SuspicionCounts::outside_span`] and otherwise ignored.
//! 2. **Scored events.** Events of a verdict class (`sensor_fault`,
//!    `process_change`, `equipment_fault`) whose `[start, end)` overlaps
//!    `[from, to)`; an empty `end` of a verdict event means open-ended (still
//!    present at `to`). `failure` and `maintenance` events are never scored as
//!    detections.
//! 3. **Event end.** `end_or_to` is `end` when given, else `to` for a verdict
//!    event (open-ended) and `start` for a `failure`/`maintenance` event (a
//!    point event).
//! 4. **Match.** A suspicion matches a scored event when all hold:
//!    - same asset;
//!    - compatible sensors: an asset-level event (empty sensor) takes any
//!      suspicion on the asset; an event on a sensor takes suspicions on that
//!      sensor and asset-level suspicions (sensor null);
//!    - `event.start <= detected <= end_or_to + grace` (detection before the
//!      event starts is not a detection of it; the grace admits a late
//!      verdict on a short event);
//!    - `onset >= event.start - onset tolerance` (a suspicion whose change
//!      began well before the event describes something else).
//!
//!    One suspicion may match several events (overlapping labels); each event
//!    is judged on its own.
//! 5. **Detected, best match.** An event is detected when any suspicion matches.
//!    Its best match is the matching suspicion with, in order of preference,
//!    the event's class and mode, else its class, then the earliest
//!    `detected`, then the lowest `rank`, then the smallest `id`.
//! 6. **Scores.** Recall = detected / events, per class, per mode and
//!    overall. Class accuracy = share of detected events whose best match has
//!    the event's class; mode accuracy = share whose best match has the
//!    event's class and mode. Delay = best match `detected` − event `start`, in
//!    hours; median and 90th percentile (Hyndman & Fan type 7, the numpy and R
//!    default). A confusion matrix counts, per true class, the class of the
//!    best match, or `missed`.
//! 7. **Lead time.** For each `failure` event with `start` in `[from, to)`:
//!    the warning window opens at the earliest `start` of an
//!    `equipment_fault` event on the same asset that begins no later than the
//!    failure and ends within [`EvaluateSettings::degradation_link`] (default
//!    24 h) of it, before or after; without one, at failure −
//!    [`EvaluateSettings::failure_lookback`] (default 30 days). The warning is
//!    the earliest `equipment_fault` suspicion on the asset (any sensor) with
//!    `window start <= detected <= failure`; lead time = failure − its
//!    `detected`. No such suspicion: not warned. Reported per failure, with the
//!    median over warned failures and, for each mark in
//!    [`EvaluateSettings::lead_marks`] (24 h, 72 h, 7 d), the share of all
//!    failures warned at least that long before.
//! 8. **Not counted.** A suspicion that matches no scored event but lies on a
//!    compatible sensor of the same asset with `detected` in
//!    `[start, end_or_to + grace]` of any verdict-class event (scored or not;
//!    it failed only the onset rule, or the event lies outside the span) is
//!    neither a detection nor a false alarm
//!    ([`FalseAlarmReport::not_counted_during_events`]).
//! 9. **False alarms.** Every other suspicion in span. The rate counts only
//!    false alarms detected in *clean time*, over clean exposure, so numerator
//!    and denominator cover the same hours:
//!    - an asset's excluded time is the union, clipped to `[from, to)`, of
//!      `[start, end_or_to + grace)` for each of its events (every class, every
//!      sensor: a sensor event excludes the whole asset) and
//!      `[start, end + grace)` for each of its outages (the grace covers the
//!      restart);
//!    - clean time = `[from, to)` minus the excluded time, on assets of the
//!      fleet; exposure = the sum of clean time over the fleet's assets;
//!    - rate = false alarms in clean time / (exposure in weeks) × 100, per 100
//!      asset-weeks;
//!    - clean assets: fleet assets with no excluded time in the span; their
//!      false alarms over their exposure (the whole span each) give a second
//!      rate.
//!
//!    Diagnostics: false alarms with `detected` in `[start, end_or_to + grace]`
//!    of a `maintenance` event on a compatible sensor of the asset, or in
//!    `[start, end + grace]` of an outage of the asset, are counted
//!    ([`FalseAlarmReport::in_maintenance`], [`FalseAlarmReport::in_outages`]);
//!    so are those on assets missing from the fleet.
//!
//! These figures support decisions about tuning and trust; telltale is not a
//! protective or safety function.
//!
//! ```
//! use chrono::{DateTime, Utc};
//! use telltale_pipelines::jobs::{EvaluateSettings, evaluate};
//! let t = |s: &str| DateTime::parse_from_rfc3339(s).unwrap().to_utc();
//! let settings = EvaluateSettings::new(t("2026-05-01T00:00:00Z"), t("2026-06-01T00:00:00Z"));
//! let report = evaluate(&[], &[], &["north-b1".to_string()], &[], &settings)?;
//! // 31 clean days on one asset, no false alarm
//! assert!((report.false_alarms.exposure_asset_weeks - 31.0 / 7.0).abs() < 1e-12);
//! assert_eq!(report.false_alarms.per_100_asset_weeks, Some(0.0));
//! # Ok::<(), telltale_pipelines::jobs::InvalidEvaluateSettings>(())
//! ```

use crate::error::{Error, Result};
use crate::record::{Class, Event, Mode, Suspicion};
use crate::time::parse_time;
use chrono::{DateTime, TimeDelta, Utc};
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, BTreeSet};
use std::io::Read;
use std::path::Path;
use telltale_models::robust::{QuantileType, quantiles};

const HOUR_MS: f64 = 3_600_000.0;
const WEEK_MS: f64 = 7.0 * 24.0 * HOUR_MS;

/// The three verdict classes, in vocabulary order.
const VERDICTS: [Class; 3] = [Class::SensorFault, Class::ProcessChange, Class::EquipmentFault];

/// Settings of one evaluation; build with [`EvaluateSettings::new`] and set
/// the public fields.
///
/// | field              | default          | meaning                                                  |
/// |--------------------|------------------|----------------------------------------------------------|
/// | `from`, `to`       | (required)       | evaluation span `[from, to)`                             |
/// | `grace`            | 24 h             | late detections accepted after an event's end            |
/// | `onset_tolerance`  | 24 h             | how far a suspicion's onset may precede the event start  |
/// | `failure_lookback` | 30 days          | warning window before a failure without a degradation    |
/// | `degradation_link` | 24 h             | how near a degradation's end must be to the failure      |
/// | `lead_marks`       | 24 h, 72 h, 7 d  | lead times whose shares are reported                     |
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub struct EvaluateSettings {
    /// Start of the span, inclusive.
    pub from: DateTime<Utc>,
    /// End of the span, exclusive.
    pub to: DateTime<Utc>,
    /// Late detections accepted after an event's end (and clean time lost after it).
    pub grace: TimeDelta,
    /// How far before the event's start a matching suspicion's onset may lie.
    pub onset_tolerance: TimeDelta,
    /// Warning window before a failure when no degradation event leads to it.
    pub failure_lookback: TimeDelta,
    /// How near (before or after) a degradation event's end must be to a
    /// failure for the degradation to open its warning window.
    pub degradation_link: TimeDelta,
    /// Lead times whose shares of warned failures are reported.
    pub lead_marks: Vec<TimeDelta>,
}

impl EvaluateSettings {
    /// Default settings for the span `[from, to)`.
    pub fn new(from: DateTime<Utc>, to: DateTime<Utc>) -> Self {
        Self {
            from,
            to,
            grace: TimeDelta::hours(24),
            onset_tolerance: TimeDelta::hours(24),
            failure_lookback: TimeDelta::days(30),
            degradation_link: TimeDelta::hours(24),
            lead_marks: vec![TimeDelta::hours(24), TimeDelta::hours(72), TimeDelta::days(7)],
        }
    }

    /// Check the settings.
    ///
    /// # Errors
    /// An empty span, or a negative duration, named by field.
    pub fn check(&self) -> std::result::Result<(), InvalidEvaluateSettings> {
        let bad = |m: String| Err(InvalidEvaluateSettings(m));
        if self.from >= self.to {
            return bad(format!(
                "from {} is not before to {}; the span [from, to) would be empty",
                self.from.to_rfc3339(),
                self.to.to_rfc3339()
            ));
        }
        for (name, d) in [
            ("grace", self.grace),
            ("onset_tolerance", self.onset_tolerance),
            ("failure_lookback", self.failure_lookback),
            ("degradation_link", self.degradation_link),
        ] {
            if d < TimeDelta::zero() {
                return bad(format!("{name} must be zero or more, got {} h", hours(d)));
            }
        }
        if let Some(d) = self.lead_marks.iter().find(|d| **d < TimeDelta::zero()) {
            return bad(format!("lead marks must be zero or more, got {} h", hours(*d)));
        }
        Ok(())
    }
}

/// Settings that [`EvaluateSettings::check`] refuses.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{0}")]
pub struct InvalidEvaluateSettings(pub String);

/// A whole-asset data outage (every sensor silent): a coverage fact, not an event.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Outage {
    /// Asset id.
    pub asset: String,
    /// First missing instant.
    pub start: DateTime<Utc>,
    /// First instant with data again.
    pub end: DateTime<Utc>,
    /// Free text.
    pub note: String,
}

/// The settings an evaluation ran with, in hours.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SettingsEcho {
    /// Start of the span, inclusive.
    pub from: DateTime<Utc>,
    /// End of the span, exclusive.
    pub to: DateTime<Utc>,
    /// [`EvaluateSettings::grace`], hours.
    pub grace_hours: f64,
    /// [`EvaluateSettings::onset_tolerance`], hours.
    pub onset_tolerance_hours: f64,
    /// [`EvaluateSettings::failure_lookback`], hours.
    pub failure_lookback_hours: f64,
    /// [`EvaluateSettings::degradation_link`], hours.
    pub degradation_link_hours: f64,
}

/// How many suspicions took part.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct SuspicionCounts {
    /// All suspicions given.
    pub total: usize,
    /// With `detected` in `[from, to)`: evaluated.
    pub in_span: usize,
    /// With `detected` outside `[from, to)`: ignored.
    pub outside_span: usize,
    /// In span, on assets missing from the fleet.
    pub unknown_asset: usize,
}

/// How many events took part.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct EventCounts {
    /// All events given.
    pub total: usize,
    /// Verdict-class events overlapping the span: scored.
    pub scored: usize,
    /// `failure` events in the span: lead time.
    pub failures: usize,
    /// Events on assets missing from the fleet.
    pub unknown_asset: usize,
}

/// Detection figures over a set of scored events; ratios are `None` when
/// their denominator is zero.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Score {
    /// Scored events.
    pub events: usize,
    /// Of them, detected.
    pub detected: usize,
    /// detected / events.
    pub recall: Option<f64>,
    /// Detected events whose best match has the event's class.
    pub class_correct: usize,
    /// class_correct / detected.
    pub class_accuracy: Option<f64>,
    /// Detected events whose best match has the event's class and mode.
    pub mode_correct: usize,
    /// mode_correct / detected.
    pub mode_accuracy: Option<f64>,
    /// Median delay of the best match, hours.
    pub delay_median_hours: Option<f64>,
    /// 90th percentile of the delay, hours (Hyndman & Fan type 7).
    pub delay_p90_hours: Option<f64>,
}

/// [`Score`] of one class.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClassScore {
    /// The true class.
    pub class: Class,
    /// Its figures.
    #[serde(flatten)]
    pub score: Score,
}

/// [`Score`] of one mode (present among the scored events).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModeScore {
    /// The true class.
    pub class: Class,
    /// The true mode.
    pub mode: Mode,
    /// Its figures.
    #[serde(flatten)]
    pub score: Score,
}

/// One row of the confusion matrix: true class → class of the best match.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct ConfusionRow {
    /// The true class.
    pub truth: Class,
    /// Best match `sensor_fault`.
    pub sensor_fault: usize,
    /// Best match `process_change`.
    pub process_change: usize,
    /// Best match `equipment_fault`.
    pub equipment_fault: usize,
    /// Not detected.
    pub missed: usize,
}

/// The suspicion chosen as an event's best match.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BestMatch {
    /// Suspicion id.
    pub id: String,
    /// Suspicion rank.
    pub rank: u32,
    /// Suspicion sensor (`None`: asset-level).
    pub sensor: Option<String>,
    /// Verdict class.
    pub class: Class,
    /// Verdict mode.
    pub mode: Mode,
    /// Estimated onset.
    pub onset: DateTime<Utc>,
    /// Detection time.
    pub detected: DateTime<Utc>,
    /// detected − event start, hours.
    pub delay_hours: f64,
}

/// The outcome of one scored event.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EventOutcome {
    /// Position of the event in the input (0-based).
    pub index: usize,
    /// Asset id.
    pub asset: String,
    /// Sensor (`None`: asset-level).
    pub sensor: Option<String>,
    /// True class.
    pub class: Class,
    /// True mode.
    pub mode: Option<Mode>,
    /// Event start.
    pub start: DateTime<Utc>,
    /// Event end (`None`: open-ended).
    pub end: Option<DateTime<Utc>>,
    /// Number of matching suspicions.
    pub matches: usize,
    /// Best match, when detected.
    pub best: Option<BestMatch>,
}

impl EventOutcome {
    /// Whether any suspicion matched.
    pub fn detected(&self) -> bool {
        self.best.is_some()
    }
}

/// Where a failure's warning window opens.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum WindowOpen {
    /// At the start of the degradation event leading to the failure.
    Degradation,
    /// At failure − [`EvaluateSettings::failure_lookback`].
    Lookback,
}

/// Lead time before one failure.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FailureOutcome {
    /// Position of the failure event in the input (0-based).
    pub index: usize,
    /// Asset id.
    pub asset: String,
    /// Failure time.
    pub at: DateTime<Utc>,
    /// Start of the warning window.
    pub window_start: DateTime<Utc>,
    /// What opened it.
    pub window_open: WindowOpen,
    /// Id of the earliest `equipment_fault` suspicion in the window.
    pub warned_by: Option<String>,
    /// Its detection time.
    pub warned_at: Option<DateTime<Utc>>,
    /// failure − warned_at, hours.
    pub lead_hours: Option<f64>,
}

/// Share of failures warned at least a given time before.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LeadMark {
    /// The mark, hours.
    pub hours: f64,
    /// Failures warned at least that long before.
    pub warned: usize,
    /// warned / failures.
    pub share: Option<f64>,
}

/// Lead times before failures.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LeadTimeReport {
    /// One per failure in the span, in input order.
    pub failures: Vec<FailureOutcome>,
    /// Failures with a warning.
    pub warned: usize,
    /// Median lead over warned failures, hours.
    pub median_hours: Option<f64>,
    /// Shares at each of [`EvaluateSettings::lead_marks`].
    pub marks: Vec<LeadMark>,
}

/// One false alarm.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FalseAlarm {
    /// Suspicion id.
    pub id: String,
    /// Suspicion rank.
    pub rank: u32,
    /// Asset id.
    pub asset: String,
    /// Sensor (`None`: asset-level).
    pub sensor: Option<String>,
    /// Verdict class.
    pub class: Class,
    /// Verdict mode.
    pub mode: Mode,
    /// Detection time.
    pub detected: DateTime<Utc>,
    /// Detected in clean time (counts towards the rate).
    pub clean_time: bool,
    /// On a clean asset.
    pub clean_asset: bool,
    /// Inside a maintenance window (or its grace).
    pub in_maintenance: bool,
    /// Inside an outage (or its grace).
    pub in_outage: bool,
}

/// False alarms on the assets that had no event and no outage.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CleanAssets {
    /// The clean assets, sorted.
    pub assets: Vec<String>,
    /// False alarms on them.
    pub false_alarms: usize,
    /// Their exposure, asset-weeks.
    pub exposure_asset_weeks: f64,
    /// false_alarms per 100 asset-weeks.
    pub per_100_asset_weeks: Option<f64>,
}

/// False alarms and the exposure they are judged against.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FalseAlarmReport {
    /// All false alarms.
    pub total: usize,
    /// Of them, detected in clean time on fleet assets.
    pub in_clean_time: usize,
    /// Clean time summed over the fleet, asset-weeks.
    pub exposure_asset_weeks: f64,
    /// in_clean_time per 100 asset-weeks of exposure.
    pub per_100_asset_weeks: Option<f64>,
    /// The same on clean assets only.
    pub clean_assets: CleanAssets,
    /// Diagnostic: false alarms inside maintenance windows (or their grace).
    pub in_maintenance: usize,
    /// Diagnostic: false alarms inside outages (or their grace).
    pub in_outages: usize,
    /// Diagnostic: false alarms on assets missing from the fleet.
    pub unknown_asset: usize,
    /// Unmatched suspicions inside a verdict event's window on a compatible
    /// sensor: neither detections nor false alarms (rule 8).
    pub not_counted_during_events: usize,
    /// Every false alarm, by detection time.
    pub list: Vec<FalseAlarm>,
}

/// Everything [`evaluate`] measures.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[non_exhaustive]
pub struct EvaluationReport {
    /// The settings used.
    pub settings: SettingsEcho,
    /// Suspicion counts.
    pub suspicions: SuspicionCounts,
    /// Event counts.
    pub events: EventCounts,
    /// Over all scored events.
    pub overall: Score,
    /// Per verdict class (all three, in vocabulary order).
    pub by_class: Vec<ClassScore>,
    /// Per mode present among the scored events.
    pub by_mode: Vec<ModeScore>,
    /// True class → class of the best match.
    pub confusion: Vec<ConfusionRow>,
    /// One per scored event, in input order.
    pub per_event: Vec<EventOutcome>,
    /// Lead time before failures.
    pub lead_time: LeadTimeReport,
    /// False alarms.
    pub false_alarms: FalseAlarmReport,
}

impl EvaluationReport {
    /// The report as pretty-printed JSON.
    ///
    /// # Errors
    /// Only if serialisation fails (the report holds no non-finite numbers).
    pub fn to_json(&self) -> serde_json::Result<String> {
        serde_json::to_string_pretty(self)
    }

    /// A report read back from [`EvaluationReport::to_json`]'s text.
    ///
    /// # Errors
    /// When the text is not such a report.
    pub fn from_json(text: &str) -> serde_json::Result<Self> {
        serde_json::from_str(text)
    }
}

fn hours(d: TimeDelta) -> f64 {
    d.num_milliseconds() as f64 / HOUR_MS
}

fn ratio(num: usize, den: usize) -> Option<f64> {
    (den > 0).then(|| num as f64 / den as f64)
}

/// End of an event for windows (rule 3).
fn end_or_to(e: &Event, to: DateTime<Utc>) -> DateTime<Utc> {
    match e.end {
        Some(end) => end,
        None if e.class.is_verdict() => to,
        None => e.start,
    }
}

/// Rule 4's sensor compatibility.
fn sensors_compatible(event: Option<&str>, suspicion: Option<&str>) -> bool {
    match (event, suspicion) {
        (None, _) | (Some(_), None) => true,
        (Some(a), Some(b)) => a == b,
    }
}

/// Same asset, compatible sensor, detected in `[start, end_or_to + grace]`.
fn in_event_window(e: &Event, s: &Suspicion, st: &EvaluateSettings) -> bool {
    e.asset == s.asset
        && sensors_compatible(e.sensor.as_deref(), s.sensor.as_deref())
        && s.detected >= e.start
        && s.detected <= end_or_to(e, st.to) + st.grace
}

/// Rule 4: does `s` match the scored event `e`?
fn matches(e: &Event, s: &Suspicion, st: &EvaluateSettings) -> bool {
    in_event_window(e, s, st) && s.onset >= e.start - st.onset_tolerance
}

/// Rule 5's preference: lower is better.
fn preference(e: &Event, s: &Suspicion) -> (u8, DateTime<Utc>, u32, String) {
    let tier = if s.class == e.class && Some(s.mode) == e.mode {
        0
    } else if s.class == e.class {
        1
    } else {
        2
    };
    (tier, s.detected, s.rank, s.id.clone())
}

fn score(outcomes: &[&EventOutcome]) -> Score {
    let detected: Vec<&BestMatch> = outcomes.iter().filter_map(|o| o.best.as_ref()).collect();
    let class_correct =
        outcomes.iter().filter(|o| o.best.as_ref().is_some_and(|b| b.class == o.class)).count();
    let mode_correct = outcomes
        .iter()
        .filter(|o| o.best.as_ref().is_some_and(|b| b.class == o.class && Some(b.mode) == o.mode))
        .count();
    let delays: Vec<f64> = detected.iter().map(|b| b.delay_hours).collect();
    let q = quantiles(&delays, &[0.5, 0.9], QuantileType::Type7);
    Score {
        events: outcomes.len(),
        detected: detected.len(),
        recall: ratio(detected.len(), outcomes.len()),
        class_correct,
        class_accuracy: ratio(class_correct, detected.len()),
        mode_correct,
        mode_accuracy: ratio(mode_correct, detected.len()),
        delay_median_hours: q.as_ref().map(|v| v[0]),
        delay_p90_hours: q.as_ref().map(|v| v[1]),
    }
}

/// Half-open intervals in epoch ms, merged; returns their total length.
fn union_length(mut iv: Vec<(i64, i64)>) -> i64 {
    iv.retain(|(a, b)| b > a);
    iv.sort_unstable();
    let mut total = 0i64;
    let mut cur: Option<(i64, i64)> = None;
    for (a, b) in iv {
        match cur {
            Some((c0, c1)) if a <= c1 => cur = Some((c0, c1.max(b))),
            Some((c0, c1)) => {
                total += c1 - c0;
                cur = Some((a, b));
            }
            None => cur = Some((a, b)),
        }
    }
    if let Some((c0, c1)) = cur {
        total += c1 - c0;
    }
    total
}

/// Rule 9's excluded intervals of every asset, clipped to the span, epoch ms.
fn exclusions(
    events: &[Event],
    outages: &[Outage],
    st: &EvaluateSettings,
) -> BTreeMap<String, Vec<(i64, i64)>> {
    let (lo, hi) = (st.from.timestamp_millis(), st.to.timestamp_millis());
    let mut out: BTreeMap<String, Vec<(i64, i64)>> = BTreeMap::new();
    let spans = events
        .iter()
        .map(|e| (&e.asset, e.start, end_or_to(e, st.to) + st.grace))
        .chain(outages.iter().map(|o| (&o.asset, o.start, o.end + st.grace)));
    for (asset, a, b) in spans {
        let (a, b) = (a.timestamp_millis().max(lo), b.timestamp_millis().min(hi));
        if b > a {
            out.entry(asset.clone()).or_default().push((a, b));
        }
    }
    out
}

/// Score `suspicions` against `events` over `[settings.from, settings.to)`;
/// `fleet` lists the assets whose clean time is the false-alarm exposure;
/// `outages` are whole-asset coverage gaps. The rules are in the module docs.
///
/// # Errors
/// [`InvalidEvaluateSettings`] when [`EvaluateSettings::check`] refuses the settings.
pub fn evaluate(
    suspicions: &[Suspicion],
    events: &[Event],
    fleet: &[String],
    outages: &[Outage],
    settings: &EvaluateSettings,
) -> std::result::Result<EvaluationReport, InvalidEvaluateSettings> {
    settings.check()?;
    let st = settings;
    let fleet: BTreeSet<&str> = fleet.iter().map(String::as_str).collect();

    // Rule 1.
    let in_span: Vec<&Suspicion> =
        suspicions.iter().filter(|s| s.detected >= st.from && s.detected < st.to).collect();
    let mut by_asset: BTreeMap<&str, Vec<usize>> = BTreeMap::new();
    for (k, s) in in_span.iter().enumerate() {
        by_asset.entry(s.asset.as_str()).or_default().push(k);
    }
    let on_asset = |a: &str| by_asset.get(a).map(Vec::as_slice).unwrap_or(&[]);

    // Rules 2, 4, 5.
    let mut matched = vec![false; in_span.len()];
    let mut per_event = Vec::new();
    for (index, e) in events.iter().enumerate() {
        let overlaps = e.start < st.to && e.end.is_none_or(|end| end > st.from);
        if !e.class.is_verdict() || !overlaps {
            continue;
        }
        let mut n = 0usize;
        let mut best: Option<&Suspicion> = None;
        for &k in on_asset(&e.asset) {
            let s = in_span[k];
            if !matches(e, s, st) {
                continue;
            }
            matched[k] = true;
            n += 1;
            if best.is_none_or(|b| preference(e, s) < preference(e, b)) {
                best = Some(s);
            }
        }
        per_event.push(EventOutcome {
            index,
            asset: e.asset.clone(),
            sensor: e.sensor.clone(),
            class: e.class,
            mode: e.mode,
            start: e.start,
            end: e.end,
            matches: n,
            best: best.map(|s| BestMatch {
                id: s.id.clone(),
                rank: s.rank,
                sensor: s.sensor.clone(),
                class: s.class,
                mode: s.mode,
                onset: s.onset,
                detected: s.detected,
                delay_hours: hours(s.detected - e.start),
            }),
        });
    }

    // Rule 6.
    let all: Vec<&EventOutcome> = per_event.iter().collect();
    let overall = score(&all);
    let by_class: Vec<ClassScore> = VERDICTS
        .iter()
        .map(|&c| {
            let of: Vec<&EventOutcome> = per_event.iter().filter(|o| o.class == c).collect();
            ClassScore { class: c, score: score(&of) }
        })
        .collect();
    let modes: BTreeSet<(Class, Mode)> =
        per_event.iter().filter_map(|o| o.mode.map(|m| (o.class, m))).collect();
    let by_mode: Vec<ModeScore> = modes
        .into_iter()
        .map(|(class, mode)| {
            let of: Vec<&EventOutcome> =
                per_event.iter().filter(|o| o.class == class && o.mode == Some(mode)).collect();
            ModeScore { class, mode, score: score(&of) }
        })
        .collect();
    let confusion: Vec<ConfusionRow> = VERDICTS
        .iter()
        .map(|&truth| {
            let of = per_event.iter().filter(|o| o.class == truth);
            let to = |c: Class| {
                of.clone().filter(|o| o.best.as_ref().is_some_and(|b| b.class == c)).count()
            };
            ConfusionRow {
                truth,
                sensor_fault: to(Class::SensorFault),
                process_change: to(Class::ProcessChange),
                equipment_fault: to(Class::EquipmentFault),
                missed: of.clone().filter(|o| o.best.is_none()).count(),
            }
        })
        .collect();

    // Rule 7.
    let mut failures = Vec::new();
    for (index, f) in events.iter().enumerate() {
        if f.class != Class::Failure || f.start < st.from || f.start >= st.to {
            continue;
        }
        let degradation = events
            .iter()
            .filter(|d| {
                d.class == Class::EquipmentFault
                    && d.asset == f.asset
                    && d.start <= f.start
                    && d.end.is_some_and(|end| (end - f.start).abs() <= st.degradation_link)
            })
            .map(|d| d.start)
            .min();
        let (window_start, window_open) = match degradation {
            Some(t) => (t, WindowOpen::Degradation),
            None => (f.start - st.failure_lookback, WindowOpen::Lookback),
        };
        let warning = on_asset(&f.asset)
            .iter()
            .map(|&k| in_span[k])
            .filter(|s| {
                s.class == Class::EquipmentFault
                    && s.detected >= window_start
                    && s.detected <= f.start
            })
            .min_by(|a, b| (a.detected, a.rank, &a.id).cmp(&(b.detected, b.rank, &b.id)));
        failures.push(FailureOutcome {
            index,
            asset: f.asset.clone(),
            at: f.start,
            window_start,
            window_open,
            warned_by: warning.map(|s| s.id.clone()),
            warned_at: warning.map(|s| s.detected),
            lead_hours: warning.map(|s| hours(f.start - s.detected)),
        });
    }
    let leads: Vec<f64> = failures.iter().filter_map(|f| f.lead_hours).collect();
    let marks = st
        .lead_marks
        .iter()
        .map(|&m| {
            let warned = leads.iter().filter(|&&l| l >= hours(m)).count();
            LeadMark { hours: hours(m), warned, share: ratio(warned, failures.len()) }
        })
        .collect();
    let lead_time = LeadTimeReport {
        warned: leads.len(),
        median_hours: quantiles(&leads, &[0.5], QuantileType::Type7).map(|v| v[0]),
        marks,
        failures,
    };

    // Rules 8, 9.
    let excluded = exclusions(events, outages, st);
    let span_ms = (st.to - st.from).num_milliseconds();
    let exposure_ms: i64 = fleet
        .iter()
        .map(|a| span_ms - excluded.get(*a).map_or(0, |iv| union_length(iv.clone())))
        .sum();
    let clean_assets: Vec<String> = fleet
        .iter()
        .filter(|a| excluded.get(**a).is_none_or(Vec::is_empty))
        .map(|a| (*a).to_owned())
        .collect();
    let in_clean_time = |s: &Suspicion| {
        let t = s.detected.timestamp_millis();
        fleet.contains(s.asset.as_str())
            && excluded.get(&s.asset).is_none_or(|iv| !iv.iter().any(|&(a, b)| a <= t && t < b))
    };
    let mut not_counted = 0usize;
    let mut list = Vec::new();
    for (k, s) in in_span.iter().enumerate() {
        if matched[k] {
            continue;
        }
        if events.iter().any(|e| e.class.is_verdict() && in_event_window(e, s, st)) {
            not_counted += 1;
            continue;
        }
        let in_maintenance =
            events.iter().any(|e| e.class == Class::Maintenance && in_event_window(e, s, st));
        let in_outage = outages
            .iter()
            .any(|o| o.asset == s.asset && s.detected >= o.start && s.detected <= o.end + st.grace);
        list.push(FalseAlarm {
            id: s.id.clone(),
            rank: s.rank,
            asset: s.asset.clone(),
            sensor: s.sensor.clone(),
            class: s.class,
            mode: s.mode,
            detected: s.detected,
            clean_time: in_clean_time(s),
            clean_asset: clean_assets.contains(&s.asset),
            in_maintenance,
            in_outage,
        });
    }
    list.sort_by(|a, b| (a.detected, &a.asset, &a.id).cmp(&(b.detected, &b.asset, &b.id)));
    let in_clean = list.iter().filter(|f| f.clean_time).count();
    let per_100 = |n: usize, ms: i64| (ms > 0).then(|| n as f64 / (ms as f64 / WEEK_MS) * 100.0);
    let clean_ms = span_ms * clean_assets.len() as i64;
    let clean_fa = list.iter().filter(|f| f.clean_asset).count();
    let false_alarms = FalseAlarmReport {
        total: list.len(),
        in_clean_time: in_clean,
        exposure_asset_weeks: exposure_ms as f64 / WEEK_MS,
        per_100_asset_weeks: per_100(in_clean, exposure_ms),
        clean_assets: CleanAssets {
            assets: clean_assets,
            false_alarms: clean_fa,
            exposure_asset_weeks: clean_ms as f64 / WEEK_MS,
            per_100_asset_weeks: per_100(clean_fa, clean_ms),
        },
        in_maintenance: list.iter().filter(|f| f.in_maintenance).count(),
        in_outages: list.iter().filter(|f| f.in_outage).count(),
        unknown_asset: list.iter().filter(|f| !fleet.contains(f.asset.as_str())).count(),
        not_counted_during_events: not_counted,
        list,
    };

    Ok(EvaluationReport {
        settings: SettingsEcho {
            from: st.from,
            to: st.to,
            grace_hours: hours(st.grace),
            onset_tolerance_hours: hours(st.onset_tolerance),
            failure_lookback_hours: hours(st.failure_lookback),
            degradation_link_hours: hours(st.degradation_link),
        },
        suspicions: SuspicionCounts {
            total: suspicions.len(),
            in_span: in_span.len(),
            outside_span: suspicions.len() - in_span.len(),
            unknown_asset: in_span.iter().filter(|s| !fleet.contains(s.asset.as_str())).count(),
        },
        events: EventCounts {
            total: events.len(),
            scored: per_event.len(),
            failures: lead_time.failures.len(),
            unknown_asset: events.iter().filter(|e| !fleet.contains(e.asset.as_str())).count(),
        },
        overall,
        by_class,
        by_mode,
        confusion,
        per_event,
        lead_time,
        false_alarms,
    })
}

/// Read a whole-asset outage file: CSV with header `asset,start,end,note`
/// (`note` may be left out), times RFC 3339 or a date, `end` after `start`.
///
/// # Errors
/// I/O errors, and [`Error::BadInput`] naming file, row and field.
pub fn read_outages(path: impl AsRef<Path>) -> Result<Vec<Outage>> {
    let path = path.as_ref();
    let file = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
    read_outages_from(std::io::BufReader::new(file), path)
}

/// [`read_outages`] from any reader; `name` labels errors.
///
/// # Errors
/// As [`read_outages`].
pub fn read_outages_from(r: impl Read, name: &Path) -> Result<Vec<Outage>> {
    let mut rdr = csv::ReaderBuilder::new().has_headers(true).from_reader(r);
    let header =
        rdr.headers().map_err(|e| Error::bad_input(name, format!("row 1 (header): {e}")))?;
    let got: Vec<&str> = header.iter().collect();
    let with_note = match got.as_slice() {
        ["asset", "start", "end", "note"] => true,
        ["asset", "start", "end"] => false,
        _ => {
            return Err(Error::bad_input(
                name,
                format!(
                    "row 1 (header): columns are {:?}; an outage file needs asset,start,end,note \
                     (note may be left out)",
                    got.join(",")
                ),
            ));
        }
    };
    let mut out = Vec::new();
    for (i, rec) in rdr.records().enumerate() {
        let row = format!("row {} (header is row 1)", i + 2);
        let rec = rec.map_err(|e| Error::bad_input(name, format!("{row}: {e}")))?;
        let field = |k: usize| rec.get(k).unwrap_or("").trim();
        let err = |f: &str, m: String| Error::bad_input(name, format!("{row}, field `{f}`: {m}"));
        if field(0).is_empty() {
            return Err(err("asset", "asset is empty; every outage names its asset".into()));
        }
        let start = parse_time(field(1)).map_err(|m| err("start", m))?;
        let end = parse_time(field(2)).map_err(|m| err("end", m))?;
        if end <= start {
            return Err(err(
                "end",
                format!("end {} is not after start {}; fix or drop the row", field(2), field(1)),
            ));
        }
        out.push(Outage {
            asset: field(0).to_owned(),
            start,
            end,
            note: if with_note { field(3).to_owned() } else { String::new() },
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    //! Every expected figure below is a hand computation from the small
    //! made-up records of its test (the arithmetic is in the comments); the
    //! percentiles are Hyndman & Fan (1996) type 7, checked against numpy's
    //! default `numpy.percentile(..., method="linear")`.
    use super::*;
    use crate::record::suspicion_id;

    fn t(s: &str) -> DateTime<Utc> {
        parse_time(s).unwrap()
    }

    fn ev(asset: &str, sensor: Option<&str>, mode: Mode, start: &str, end: Option<&str>) -> Event {
        Event {
            asset: asset.into(),
            sensor: sensor.map(Into::into),
            class: mode.class(),
            mode: Some(mode),
            start: t(start),
            end: end.map(t),
            note: String::new(),
        }
    }

    fn point(asset: &str, class: Class, start: &str, end: Option<&str>) -> Event {
        Event {
            asset: asset.into(),
            sensor: None,
            class,
            mode: None,
            start: t(start),
            end: end.map(t),
            note: String::new(),
        }
    }

    fn sus(
        asset: &str,
        sensor: Option<&str>,
        mode: Mode,
        onset: &str,
        detected: &str,
    ) -> Suspicion {
        Suspicion {
            id: suspicion_id(asset, sensor, mode.class(), mode, t(onset)),
            rank: 1,
            asset: asset.into(),
            sensor: sensor.map(Into::into),
            class: mode.class(),
            mode,
            score: 0.5,
            magnitude: 3.0,
            onset: t(onset),
            detected: t(detected),
            summary: String::new(),
            evidence: vec![],
        }
    }

    /// Span 2026-03-01 .. 2026-03-29: exactly 4 weeks.
    fn settings() -> EvaluateSettings {
        EvaluateSettings::new(t("2026-03-01"), t("2026-03-29"))
    }

    fn fleet(ids: &[&str]) -> Vec<String> {
        ids.iter().map(|s| (*s).to_owned()).collect()
    }

    fn run(s: &[Suspicion], e: &[Event]) -> EvaluationReport {
        evaluate(s, e, &fleet(&["a", "b"]), &[], &settings()).unwrap()
    }

    fn detected(s: &[Suspicion], e: &Event) -> bool {
        run(s, std::slice::from_ref(e)).per_event[0].detected()
    }

    const BIAS_START: &str = "2026-03-05T00:00:00Z";
    const BIAS_END: &str = "2026-03-08T00:00:00Z";

    fn bias_on_a1() -> Event {
        ev("a", Some("s1"), Mode::Bias, BIAS_START, Some(BIAS_END))
    }

    #[test]
    fn match_needs_the_same_asset() {
        let e = bias_on_a1();
        assert!(detected(
            &[sus("a", Some("s1"), Mode::Bias, BIAS_START, "2026-03-05T06:00:00Z")],
            &e
        ));
        assert!(!detected(
            &[sus("b", Some("s1"), Mode::Bias, BIAS_START, "2026-03-05T06:00:00Z")],
            &e
        ));
    }

    #[test]
    fn sensor_event_takes_its_sensor_or_asset_level_suspicions_only() {
        let e = bias_on_a1();
        let at = |sensor| sus("a", sensor, Mode::Bias, BIAS_START, "2026-03-05T06:00:00Z");
        assert!(detected(&[at(Some("s1"))], &e));
        assert!(detected(&[at(None)], &e), "asset-level suspicion matches a sensor event");
        assert!(!detected(&[at(Some("s2"))], &e), "another sensor does not");
    }

    #[test]
    fn asset_level_event_takes_any_sensor() {
        let e = ev("a", None, Mode::Degradation, BIAS_START, Some(BIAS_END));
        for sensor in [Some("s1"), Some("s9"), None] {
            let s = sus("a", sensor, Mode::Degradation, BIAS_START, "2026-03-06T00:00:00Z");
            assert!(detected(&[s], &e), "{sensor:?}");
        }
    }

    #[test]
    fn detection_window_is_start_to_end_plus_grace() {
        let e = bias_on_a1(); // end 03-08T00 + 24 h grace = 03-09T00
        let at = |d| sus("a", Some("s1"), Mode::Bias, BIAS_START, d);
        assert!(!detected(&[at("2026-03-04T23:59:59Z")], &e), "before start");
        assert!(detected(&[at(BIAS_START)], &e), "at start (closed)");
        assert!(detected(&[at("2026-03-09T00:00:00Z")], &e), "at end + grace (closed)");
        assert!(!detected(&[at("2026-03-09T00:00:01Z")], &e), "after end + grace");
        // the grace is a setting: with 0 h the window ends at the event's end
        let mut st = settings();
        st.grace = TimeDelta::zero();
        let r = evaluate(&[at("2026-03-08T00:00:01Z")], &[e], &fleet(&["a"]), &[], &st).unwrap();
        assert!(!r.per_event[0].detected());
    }

    #[test]
    fn open_ended_event_window_runs_to_the_span_end() {
        let e = ev("a", None, Mode::LevelShift, "2026-03-20", None);
        let s = sus("a", None, Mode::LevelShift, "2026-03-20", "2026-03-28T23:00:00Z");
        assert!(detected(&[s], &e));
    }

    #[test]
    fn onset_may_precede_the_start_by_the_tolerance_only() {
        let e = bias_on_a1(); // start 03-05T00, tolerance 24 h: onset >= 03-04T00
        let at = |onset| sus("a", Some("s1"), Mode::Bias, onset, "2026-03-05T12:00:00Z");
        assert!(detected(&[at("2026-03-04T00:00:00Z")], &e));
        assert!(!detected(&[at("2026-03-03T23:59:59Z")], &e));
        // ... and such a suspicion is not a false alarm either (rule 8)
        let r = run(&[at("2026-03-03T00:00:00Z")], &[e]);
        assert_eq!(r.false_alarms.total, 0);
        assert_eq!(r.false_alarms.not_counted_during_events, 1);
    }

    #[test]
    fn only_verdict_events_overlapping_the_span_are_scored() {
        let e = [
            ev("a", Some("s1"), Mode::Bias, "2026-02-01", Some("2026-02-10")), // before span
            ev("a", Some("s1"), Mode::Bias, "2026-02-25", Some("2026-03-02")), // overlaps
            ev("a", Some("s1"), Mode::Bias, "2026-02-25", Some("2026-03-01")), // ends at from: no
            ev("a", None, Mode::LevelShift, "2026-03-29", None),               // starts at to: no
            point("a", Class::Failure, "2026-03-10", None),
            point("a", Class::Maintenance, "2026-03-10", Some("2026-03-11")),
        ];
        let r = run(&[], &e);
        assert_eq!(r.events.scored, 1);
        assert_eq!(r.per_event[0].index, 1);
        assert_eq!(r.events.failures, 1);
    }

    #[test]
    fn suspicions_detected_outside_the_span_are_ignored() {
        let s = [
            sus("a", None, Mode::Bias, "2026-02-27", "2026-02-28T23:59:59Z"),
            sus("a", None, Mode::Bias, "2026-03-28", "2026-03-29T00:00:00Z"),
            sus("a", None, Mode::Bias, "2026-03-28", "2026-03-28T23:59:59Z"),
        ];
        let r = run(&s, &[]);
        assert_eq!((r.suspicions.in_span, r.suspicions.outside_span), (1, 2));
        assert_eq!(r.false_alarms.total, 1);
    }

    #[test]
    fn best_match_prefers_class_and_mode_then_class_then_earliest() {
        let e = ev("a", None, Mode::Degradation, BIAS_START, None);
        let early_wrong = sus("a", None, Mode::Bias, BIAS_START, "2026-03-05T01:00:00Z");
        let step = sus("a", None, Mode::StepChange, BIAS_START, "2026-03-05T02:00:00Z");
        let degr_late = sus("a", None, Mode::Degradation, BIAS_START, "2026-03-05T05:00:00Z");
        let degr_early = sus("a", None, Mode::Degradation, BIAS_START, "2026-03-05T04:00:00Z");
        let pick = |s: &[Suspicion]| run(s, std::slice::from_ref(&e)).per_event[0].clone();

        let o = pick(&[early_wrong.clone(), step.clone(), degr_late.clone(), degr_early.clone()]);
        assert_eq!(o.matches, 4);
        let b = o.best.unwrap();
        assert_eq!((b.mode, b.delay_hours), (Mode::Degradation, 4.0), "class+mode, earliest");
        let b = pick(&[early_wrong.clone(), step]).best.unwrap();
        assert_eq!(b.mode, Mode::StepChange, "same class beats an earlier other class");
        let b = pick(&[early_wrong]).best.unwrap();
        assert_eq!(b.class, Class::SensorFault, "any match counts as a detection");
    }

    #[test]
    fn accuracy_recall_confusion_and_delays_by_hand() {
        // Four sensor_fault events on asset a, one process_change on b.
        let e = [
            ev("a", Some("s1"), Mode::Bias, "2026-03-02", Some("2026-03-03")),
            ev("a", Some("s2"), Mode::Stuck, "2026-03-05", Some("2026-03-06")),
            ev("a", Some("s3"), Mode::Bias, "2026-03-10", Some("2026-03-11")),
            ev("a", Some("s4"), Mode::Drift, "2026-03-15", Some("2026-03-16")),
            ev("b", None, Mode::LevelShift, "2026-03-10", None),
        ];
        let s = [
            // e0: right class and mode, 2 h late
            sus("a", Some("s1"), Mode::Bias, "2026-03-02", "2026-03-02T02:00:00Z"),
            // e1: right class, wrong mode (spikes), 10 h late
            sus("a", Some("s2"), Mode::Spikes, "2026-03-05", "2026-03-05T10:00:00Z"),
            // e2: wrong class (equipment_fault), 6 h late
            sus("a", Some("s3"), Mode::StepChange, "2026-03-10", "2026-03-10T06:00:00Z"),
            // e3: missed. e4 (b): right class and mode, 30 h late
            sus("b", None, Mode::LevelShift, "2026-03-10", "2026-03-11T06:00:00Z"),
        ];
        let r = run(&s, &e);
        // sensor_fault: 3 of 4 detected; class right on 2 of 3, mode on 1 of 3
        let sf = &r.by_class[0];
        assert_eq!(sf.class, Class::SensorFault);
        assert_eq!((sf.score.events, sf.score.detected), (4, 3));
        assert_eq!(sf.score.recall, Some(0.75));
        assert_eq!(sf.score.class_accuracy, Some(2.0 / 3.0));
        assert_eq!(sf.score.mode_accuracy, Some(1.0 / 3.0));
        // delays 2, 10, 6 h: median 6; type 7 p90: h = 0.9 * 2 = 1.8 between
        // sorted x(2) = 6 and x(3) = 10 → 6 + 0.8 * 4 = 9.2
        // (numpy.percentile([2, 10, 6], 90) = 9.2)
        assert_eq!(sf.score.delay_median_hours, Some(6.0));
        assert!((sf.score.delay_p90_hours.unwrap() - 9.2).abs() < 1e-12);
        // overall: 4 of 5, class right 3 of 4, mode 2 of 4; delays 2, 6, 10, 30
        // median (6 + 10) / 2 = 8; p90 h = 0.9 * 3 = 2.7 → 10 + 0.7 * 20 = 24
        // (numpy.percentile([2, 6, 10, 30], [50, 90]) = [8, 24])
        assert_eq!((r.overall.events, r.overall.detected), (5, 4));
        assert_eq!(r.overall.class_accuracy, Some(0.75));
        assert_eq!(r.overall.mode_accuracy, Some(0.5));
        assert_eq!(r.overall.delay_median_hours, Some(8.0));
        assert!((r.overall.delay_p90_hours.unwrap() - 24.0).abs() < 1e-12);
        // no equipment_fault event: ratios undefined, not zero
        assert_eq!(r.by_class[2].score.events, 0);
        assert_eq!(r.by_class[2].score.recall, None);
        // per mode: bias 2 of 2 detected, mode right on 1
        let bias = r.by_mode.iter().find(|m| m.mode == Mode::Bias).unwrap();
        assert_eq!((bias.score.events, bias.score.detected, bias.score.mode_correct), (2, 2, 1));
        let drift = r.by_mode.iter().find(|m| m.mode == Mode::Drift).unwrap();
        assert_eq!(drift.score.recall, Some(0.0));
        // confusion
        let row = &r.confusion[0];
        assert_eq!(
            (row.sensor_fault, row.process_change, row.equipment_fault, row.missed),
            (2, 0, 1, 1)
        );
        assert_eq!(r.confusion[1].process_change, 1);
        assert_eq!(r.false_alarms.total, 0);
    }

    #[test]
    fn false_alarm_exposure_by_hand() {
        // Span 03-01 .. 03-29 = 28 days = 4 weeks per asset. Fleet a, b, c, d.
        // a: bias on s1 03-05 .. 03-08, + 24 h grace → excluded 03-05 .. 03-09 (4 d)
        //    maintenance 03-20T00 .. 03-20T12 + 24 h → 03-20T00 .. 03-21T12 (1.5 d)
        //    clean 28 - 4 - 1.5 = 22.5 d
        // b: outage 03-10 .. 03-11 + 24 h → 03-10 .. 03-12 (2 d); clean 26 d
        // c, d: nothing: clean 28 d each (the clean assets)
        // exposure = 22.5 + 26 + 28 + 28 = 104.5 d = 14.928571... weeks
        let e = [
            bias_on_a1(),
            point("a", Class::Maintenance, "2026-03-20T00:00:00Z", Some("2026-03-20T12:00:00Z")),
        ];
        let o = [Outage {
            asset: "b".into(),
            start: t("2026-03-10"),
            end: t("2026-03-11"),
            note: String::new(),
        }];
        let s = [
            // matches the bias: a detection, not a false alarm
            sus("a", Some("s1"), Mode::Bias, BIAS_START, "2026-03-06"),
            // other sensor during the bias: a false alarm, but not in clean time
            sus("a", Some("s2"), Mode::Spikes, BIAS_START, "2026-03-06"),
            // in the maintenance's grace: false alarm, diagnostic, not clean
            sus("a", None, Mode::StepChange, "2026-03-21", "2026-03-21T06:00:00Z"),
            // clean time on a
            sus("a", Some("s1"), Mode::Noise, "2026-03-12", "2026-03-12"),
            // in the outage (its grace): false alarm, diagnostic, not clean
            sus("b", None, Mode::Dropout, "2026-03-11", "2026-03-11T12:00:00Z"),
            // clean assets
            sus("c", None, Mode::Bias, "2026-03-02", "2026-03-02"),
            sus("d", None, Mode::Bias, "2026-03-02", "2026-03-03"),
            // an asset outside the fleet
            sus("zz", None, Mode::Bias, "2026-03-02", "2026-03-03"),
        ];
        let r = evaluate(&s, &e, &fleet(&["a", "b", "c", "d"]), &o, &settings()).unwrap();
        let fa = &r.false_alarms;
        assert_eq!(fa.total, 7);
        assert_eq!(fa.in_clean_time, 3); // a/noise, c, d
        assert!((fa.exposure_asset_weeks - 104.5 / 7.0).abs() < 1e-12);
        // 3 / 14.928571 * 100 = 20.0957...
        assert!((fa.per_100_asset_weeks.unwrap() - 300.0 / (104.5 / 7.0)).abs() < 1e-9);
        assert_eq!(fa.clean_assets.assets, vec!["c", "d"]);
        assert_eq!(fa.clean_assets.false_alarms, 2);
        assert!((fa.clean_assets.exposure_asset_weeks - 8.0).abs() < 1e-12);
        assert_eq!(fa.clean_assets.per_100_asset_weeks, Some(25.0)); // 2 / 8 * 100
        assert_eq!((fa.in_maintenance, fa.in_outages, fa.unknown_asset), (1, 1, 1));
        assert_eq!(r.suspicions.unknown_asset, 1);
    }

    #[test]
    fn overlapping_exclusions_are_counted_once_and_clipped() {
        // a: bias 02-27 .. 03-02 (+24 h → 03-03), clipped to 03-01 .. 03-03 (2 d);
        //    drift 03-02 .. 03-04 (+24 h → 03-05) overlaps it: union 03-01 .. 03-05 (4 d);
        //    open level shift from 03-27: excluded to the span end (2 d).
        // clean 28 - 4 - 2 = 22 d
        let e = [
            ev("a", Some("s1"), Mode::Bias, "2026-02-27", Some("2026-03-02")),
            ev("a", Some("s2"), Mode::Drift, "2026-03-02", Some("2026-03-04")),
            ev("a", None, Mode::LevelShift, "2026-03-27", None),
        ];
        let r = evaluate(&[], &e, &fleet(&["a"]), &[], &settings()).unwrap();
        assert!((r.false_alarms.exposure_asset_weeks - 22.0 / 7.0).abs() < 1e-12);
        assert!(r.false_alarms.clean_assets.assets.is_empty());
        assert_eq!(r.false_alarms.clean_assets.per_100_asset_weeks, None);
    }

    #[test]
    fn lead_time_from_the_degradation_start() {
        // degradation 03-02 .. 03-20, failure 03-20T00.
        let e = [
            ev("a", None, Mode::Degradation, "2026-03-02", Some("2026-03-20")),
            point("a", Class::Failure, "2026-03-20", None),
        ];
        let s = [
            // before the degradation started: outside the warning window
            sus("a", None, Mode::StepChange, "2026-03-01", "2026-03-01T12:00:00Z"),
            // a sensor verdict does not warn of a failure
            sus("a", Some("s1"), Mode::Drift, "2026-03-03", "2026-03-03"),
            // the warning: 03-20 - 03-16T12 = 3.5 d = 84 h
            sus("a", Some("s1"), Mode::Degradation, "2026-03-10", "2026-03-16T12:00:00Z"),
            sus("a", None, Mode::Degradation, "2026-03-10", "2026-03-18"),
            // after the failure: too late
            sus("a", None, Mode::StepChange, "2026-03-20", "2026-03-20T01:00:00Z"),
        ];
        let r = evaluate(&s, &e, &fleet(&["a"]), &[], &settings()).unwrap();
        let f = &r.lead_time.failures[0];
        assert_eq!(f.window_open, WindowOpen::Degradation);
        assert_eq!(f.window_start, t("2026-03-02"));
        assert_eq!(f.lead_hours, Some(84.0));
        assert_eq!(f.warned_by.as_deref(), Some(s[2].id.as_str()));
        assert_eq!(r.lead_time.median_hours, Some(84.0));
        // marks 24 h and 72 h reached, 168 h not
        let shares: Vec<_> = r.lead_time.marks.iter().map(|m| m.share).collect();
        assert_eq!(shares, vec![Some(1.0), Some(1.0), Some(0.0)]);
    }

    #[test]
    fn lead_time_without_degradation_uses_the_lookback() {
        // Failure 03-28 with no degradation; lookback 30 d → window from 02-26.
        // Failure on b at 03-27 with no equipment_fault suspicion: not warned.
        let e = [
            point("a", Class::Failure, "2026-03-28", None),
            point("b", Class::Failure, "2026-03-27", None),
            // a degradation ending 3 days before the failure on b is not linked (> 24 h)
            ev("b", None, Mode::Degradation, "2026-03-10", Some("2026-03-24")),
        ];
        let s = [
            sus("a", None, Mode::StepChange, "2026-03-01", "2026-03-01T00:00:00Z"), // 648 h
            sus("b", None, Mode::StepChange, "2026-03-01", "2026-03-27T00:00:01Z"), // after
        ];
        let r = evaluate(&s, &e, &fleet(&["a", "b"]), &[], &settings()).unwrap();
        let (fa, fb) = (&r.lead_time.failures[0], &r.lead_time.failures[1]);
        assert_eq!((fa.window_open, fa.window_start), (WindowOpen::Lookback, t("2026-02-26")));
        assert_eq!(fa.lead_hours, Some(27.0 * 24.0));
        assert_eq!(fb.window_open, WindowOpen::Lookback);
        assert_eq!(fb.lead_hours, None);
        assert_eq!(r.lead_time.warned, 1);
        // one of two failures warned ≥ 7 d
        assert_eq!(r.lead_time.marks[2].share, Some(0.5));
        // with a 12 h lookback the window opens at 03-27T12: the a warning is outside it
        let mut st = settings();
        st.failure_lookback = TimeDelta::hours(12);
        let r = evaluate(&s, &e, &fleet(&["a", "b"]), &[], &st).unwrap();
        assert_eq!(r.lead_time.warned, 0);
        assert_eq!(r.lead_time.median_hours, None);
    }

    #[test]
    fn settings_are_checked() {
        let mut st = settings();
        st.to = st.from;
        assert!(evaluate(&[], &[], &[], &[], &st).unwrap_err().0.contains("empty"));
        let mut st = settings();
        st.grace = TimeDelta::hours(-1);
        assert!(st.check().unwrap_err().0.contains("grace"));
    }

    #[test]
    fn report_serialises_to_json() {
        let r = run(&[sus("a", None, Mode::Bias, "2026-03-02", "2026-03-02")], &[bias_on_a1()]);
        let v: serde_json::Value = serde_json::from_str(&r.to_json().unwrap()).unwrap();
        assert_eq!(v["false_alarms"]["total"], 1);
        assert_eq!(v["by_class"][0]["class"], "sensor_fault");
        assert_eq!(v["by_class"][0]["recall"], 0.0);
        assert_eq!(v["per_event"][0]["best"], serde_json::Value::Null);
        assert_eq!(EvaluationReport::from_json(&r.to_json().unwrap()).unwrap(), r);
    }

    #[test]
    fn outage_file_reads_and_names_bad_rows() {
        let p = Path::new("outages.csv");
        let ok = "asset,start,end,note\nb,2026-03-10T00:00:00Z,2026-03-11,power cut\n";
        let o = read_outages_from(ok.as_bytes(), p).unwrap();
        assert_eq!(o[0].end, t("2026-03-11"));
        assert_eq!(o[0].note, "power cut");
        let no_note = "asset,start,end\nb,2026-03-10,2026-03-11\n";
        assert_eq!(read_outages_from(no_note.as_bytes(), p).unwrap().len(), 1);
        let bad = "asset,start,end,note\nb,2026-03-10,2026-03-11,x\nb,2026-03-12,2026-03-11,x\n";
        let e = read_outages_from(bad.as_bytes(), p).unwrap_err().to_string();
        assert!(e.contains("outages.csv") && e.contains("row 3") && e.contains("`end`"), "{e}");
        let e = read_outages_from("asset,from,to\n".as_bytes(), p).unwrap_err().to_string();
        assert!(e.contains("header"), "{e}");
        let e = read_outages_from("asset,start,end\nb,yesterday,2026-03-11\n".as_bytes(), p)
            .unwrap_err()
            .to_string();
        assert!(e.contains("row 2") && e.contains("`start`") && e.contains("RFC 3339"), "{e}");
    }
}
