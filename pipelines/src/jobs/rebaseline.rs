//! Re-baselining after an accepted process change: learn an asset's
//! baseline again from the change's onset on, from the archived history.
//!
//! ```text
//!  accepted (asset, sensor, onset) ─► read history [onset, min(onset + learn, until))
//!        │ less than `min_span` of readings after the onset ─► NotYet (try again later)
//!        ▼
//!  condition sensor ─► AssetBaseline::relearn_sensor: that sensor only; regimes,
//!        │             other sensors and the calibration are kept
//!  context sensor, rest indicator, or no sensor (an asset-wide change)
//!        └──────────► whole asset fitted and calibrated again on the new span
//! ```
//!
//! The job writes nothing: the caller stores the new baseline (and keeps
//! the old one as a version). It adds no statistics of its own.

use crate::error::{Error, Result};
use crate::io::{AssetHistory, HistoryReader};
use crate::jobs::fit::{FitSettings, fit_and_calibrate};
use crate::jobs::scan::series_of;
use crate::jobs::store::StoredBaseline;
use crate::time::{format_time, from_millis};
use std::path::Path;
use telltale_models::baseline::{BaselineError, RelearnReport};

/// One re-baseline to do.
#[derive(Debug, Clone, PartialEq)]
pub struct RebaselineRequest {
    /// Sensor the accepted change is on (`None`: the whole asset).
    pub sensor: Option<String>,
    /// Onset of the accepted change, epoch ms: the new baseline is learnt from here on.
    pub onset_ms: i64,
    /// No reading at or after this time is used (the present), epoch ms.
    pub until_ms: i64,
    /// Longest span learnt from, ms (the span ends at `onset + learn_ms` or `until`).
    pub learn_ms: i64,
    /// Fewest ms of readings after the onset before re-learning.
    pub min_span_ms: i64,
}

/// How much of the baseline was learnt again.
#[derive(Debug, Clone, PartialEq)]
pub enum Relearnt {
    /// One condition sensor (see [`RelearnReport`]).
    Sensor(RelearnReport),
    /// The whole asset, with a new calibration; the text says why.
    Asset(String),
}

/// Result of [`rebaseline`].
#[derive(Debug, Clone)]
pub enum RebaselineOutcome {
    /// The new baseline, learnt from `[from_ms, to_ms)` (`to_ms`: the end
    /// of the grid step of the last reading used).
    Done {
        /// The asset's new baseline (not yet written).
        baseline: Box<StoredBaseline>,
        /// What was learnt again.
        relearnt: Relearnt,
        /// Start of the span learnt from, epoch ms.
        from_ms: i64,
        /// End (exclusive) of the span learnt from, epoch ms.
        to_ms: i64,
    },
    /// Not enough history after the onset yet; the text says how much there is.
    NotYet(String),
}

/// Learns `stored`'s asset again from the onset of an accepted change, from
/// the history at `history` (see the [module docs](self)).
///
/// # Errors
/// [`Error::BadInput`] naming the history for an unreadable archive, a
/// sensor not in the baseline, or a span that cannot be learnt even at its
/// full length.
pub fn rebaseline(
    history: &Path,
    stored: &StoredBaseline,
    req: &RebaselineRequest,
) -> Result<RebaselineOutcome> {
    let end = req.until_ms.min(req.onset_ms.saturating_add(req.learn_ms));
    if end <= req.onset_ms {
        return Ok(RebaselineOutcome::NotYet(format!(
            "the onset {} is not in the past yet",
            format_time(from_millis(req.onset_ms))
        )));
    }
    let position = match &req.sensor {
        None => None,
        Some(id) => Some(stored.sensors.iter().position(|s| &s.id == id).ok_or_else(|| {
            Error::bad_input(
                history,
                format!("sensor {id:?} is not in {}'s baseline; nothing to re-learn", stored.asset),
            )
        })?),
    };
    let reader = HistoryReader::try_new(history)?.with_time_range(req.onset_ms, end);
    let mut found: Option<AssetHistory> = None;
    reader.for_each_asset(|h| {
        if h.asset == stored.asset {
            found = Some(h);
        }
        Ok::<(), Error>(())
    })?;
    let history_of = found.unwrap_or(AssetHistory { asset: stored.asset.clone(), sensors: vec![] });
    let last = history_of.sensors.iter().filter_map(|s| s.ts_ms.last().copied()).max();
    let have = last.map_or(0, |t| t + 1 - req.onset_ms);
    let hours = |ms: i64| ms as f64 / 3_600_000.0;
    let full = end >= req.onset_ms.saturating_add(req.learn_ms);
    if have < req.min_span_ms {
        return Ok(RebaselineOutcome::NotYet(format!(
            "the history holds {:.1} h of {}'s readings after the onset {}; {:.1} h are needed",
            hours(have),
            stored.asset,
            format_time(from_millis(req.onset_ms)),
            hours(req.min_span_ms)
        )));
    }
    // the span learnt from ends with the grid step of the last reading
    let step = stored.baseline.step_ms.max(1);
    let end = last.map_or(end, |t| ((t.div_euclid(step) + 1) * step).min(end));
    let empty = crate::io::SensorSeries::default();
    let series = series_of(stored, &history_of, &empty);
    let not_enough = |e: &BaselineError| {
        if full {
            Err(Error::bad_input(
                history,
                format!(
                    "{}: cannot re-learn from {} to {}: {e}",
                    stored.asset,
                    format_time(from_millis(req.onset_ms)),
                    format_time(from_millis(end))
                ),
            ))
        } else {
            Ok(RebaselineOutcome::NotYet(format!(
                "{:.1} h of readings after the onset are not enough yet: {e}",
                hours(have)
            )))
        }
    };
    if let Some(j) = position {
        match stored.baseline.relearn_sensor(&series, j, req.onset_ms, end) {
            Ok((b, report)) => {
                let mut out = stored.clone();
                out.baseline = b;
                return Ok(RebaselineOutcome::Done {
                    baseline: Box::new(out),
                    relearnt: Relearnt::Sensor(report),
                    from_ms: req.onset_ms,
                    to_ms: end,
                });
            }
            Err(BaselineError::ContextSensor(_)) => {}
            Err(e) => return not_enough(&e),
        }
    }
    let why = match &req.sensor {
        None => "the accepted change is asset-wide".to_owned(),
        Some(id) => format!(
            "sensor {id:?} defines the operating regimes, so the whole asset is learnt again"
        ),
    };
    let mut settings = FitSettings::new(history, end, "");
    settings.params = stored.baseline.params;
    settings.from_ms = Some(req.onset_ms);
    match fit_and_calibrate(&settings, &series) {
        Ok((b, cal)) => {
            let mut out = stored.clone();
            out.baseline = b;
            out.calibration = Some(cal);
            out.fit_from = Some(format_time(from_millis(req.onset_ms)));
            out.fit_until = format_time(from_millis(end));
            Ok(RebaselineOutcome::Done {
                baseline: Box::new(out),
                relearnt: Relearnt::Asset(why),
                from_ms: req.onset_ms,
                to_ms: end,
            })
        }
        Err(e) => not_enough(&e),
    }
}
