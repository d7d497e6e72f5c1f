//! Parsing and validating a scoring request: one asset's readings for a
//! window, as JSON.
//!
//! ```text
//! {"asset": "north-b1",
//!  "from": "2026-05-06T00:00:00Z",        optional; default: the first reading
//!  "to":   "2026-05-07T00:00:00Z",        optional, exclusive; default: just after the last
//!  "readings": [{"sensor": "flow", "ts": "2026-05-06T00:05:00Z", "value": 212.4,
//!                "quality": "good"}, ...]}   value null = a missing reading; quality optional
//! ```
//!
//! Every error names its field as a JSON path (`readings[17].ts`). Each
//! sensor's readings must come in strictly increasing time (no repeats):
//! the service does not guess which of two readings at one time is right.
//! Readings may start before `from` (they warm the detectors up, as the
//! batch scan's warm-up does) but not more than the warm-up before it, and
//! none may be at or after `to`.

use super::error::ApiError;
use chrono::DateTime;
use serde_json::Value;
use std::collections::BTreeMap;

/// Limits of one scoring request.
#[derive(Debug, Clone, Copy)]
pub struct WindowLimits {
    /// Most readings in one request.
    pub max_readings: usize,
    /// Longest `[from, to)` and longest span of the readings, ms.
    pub max_span_ms: i64,
    /// How far before `from` readings may start, ms (the scan's warm-up).
    pub warmup_ms: i64,
}

/// One sensor's readings, in time order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SensorReadings {
    /// Times, epoch ms, strictly increasing.
    pub ts_ms: Vec<i64>,
    /// Values; NaN for a missing reading (null).
    pub value: Vec<f64>,
    /// `false` for readings marked uncertain or bad.
    pub good: Vec<bool>,
}

/// A checked window.
#[derive(Debug, Clone, PartialEq)]
pub struct Window {
    /// Asset id.
    pub asset: String,
    /// Reported span start, epoch ms.
    pub from_ms: i64,
    /// Reported span end (exclusive), epoch ms.
    pub to_ms: i64,
    /// Readings by sensor id.
    pub sensors: BTreeMap<String, SensorReadings>,
    /// Readings received.
    pub readings: usize,
}

pub(crate) fn time_field(v: &Value, field: &str) -> Result<i64, ApiError> {
    let s = v.as_str().ok_or_else(|| {
        ApiError::invalid(field, format!("{field} must be an RFC 3339 time string, got {v}"))
    })?;
    DateTime::parse_from_rfc3339(s).map(|t| t.timestamp_millis()).map_err(|e| {
        ApiError::invalid(
            field,
            format!(
                "{field}: {s:?} is not an RFC 3339 time ({e}); write e.g. 2026-05-06T10:00:00Z"
            ),
        )
    })
}

fn quality(v: Option<&Value>, field: &str) -> Result<bool, ApiError> {
    match v {
        None | Some(Value::Null) => Ok(true),
        Some(Value::String(s)) => match s.as_str() {
            "good" => Ok(true),
            "uncertain" | "bad" => Ok(false),
            _ => Err(ApiError::invalid(
                field,
                format!("{field}: {s:?} is not a quality; use good, uncertain or bad"),
            )),
        },
        Some(Value::Number(n)) if n.as_u64().is_some_and(|q| q <= 255) => Ok(n.as_u64() == Some(0)),
        Some(other) => Err(ApiError::invalid(
            field,
            format!(
                "{field}: {other} is not a quality; use good, uncertain, bad or 0..255 (0 = good)"
            ),
        )),
    }
}

/// Parses and checks a JSON window.
///
/// # Errors
/// [`ApiError`] 400 when the body is not JSON, 422 naming the field for
/// anything else wrong.
pub fn parse_json(body: &[u8], lim: &WindowLimits) -> Result<Window, ApiError> {
    let doc: Value = serde_json::from_slice(body).map_err(|e| {
        ApiError::bad_request(
            "body",
            format!("the body is not valid JSON ({e}); send a JSON object"),
        )
    })?;
    let obj = doc.as_object().ok_or_else(|| {
        ApiError::invalid("body", "the body must be a JSON object with asset and readings")
    })?;
    for k in obj.keys() {
        if !["asset", "from", "to", "readings"].contains(&k.as_str()) {
            return Err(ApiError::invalid(
                k.as_str(),
                format!("unknown field {k:?}; a window has asset, from, to and readings"),
            ));
        }
    }
    let asset = match obj.get("asset") {
        Some(Value::String(s)) if !s.is_empty() => s.clone(),
        Some(other) => {
            return Err(ApiError::invalid(
                "asset",
                format!("asset must be a non-empty string, got {other}"),
            ));
        }
        None => {
            return Err(ApiError::invalid(
                "asset",
                "asset is missing; name the asset the readings belong to",
            ));
        }
    };
    let from =
        obj.get("from").filter(|v| !v.is_null()).map(|v| time_field(v, "from")).transpose()?;
    let to = obj.get("to").filter(|v| !v.is_null()).map(|v| time_field(v, "to")).transpose()?;
    let readings = obj
        .get("readings")
        .ok_or_else(|| {
            ApiError::invalid(
                "readings",
                "readings is missing; send an array of {sensor, ts, value}",
            )
        })?
        .as_array()
        .ok_or_else(|| {
            ApiError::invalid("readings", "readings must be an array of {sensor, ts, value}")
        })?;
    if readings.is_empty() {
        return Err(ApiError::invalid("readings", "readings is empty; send at least one reading"));
    }
    if readings.len() > lim.max_readings {
        return Err(ApiError::invalid(
            "readings",
            format!(
                "{} readings is more than the limit of {} per request; split the window",
                readings.len(),
                lim.max_readings
            ),
        ));
    }
    let mut c = Collector::default();
    for (i, r) in readings.iter().enumerate() {
        let at = |f: &str| format!("readings[{i}].{f}");
        let o = r.as_object().ok_or_else(|| {
            ApiError::invalid(
                format!("readings[{i}]"),
                format!("readings[{i}] must be an object {{sensor, ts, value}}"),
            )
        })?;
        for k in o.keys() {
            if !["sensor", "ts", "value", "quality"].contains(&k.as_str()) {
                return Err(ApiError::invalid(
                    at(k),
                    format!(
                        "{}: unknown field; a reading has sensor, ts, value and quality",
                        at(k)
                    ),
                ));
            }
        }
        let sensor = match o.get("sensor") {
            Some(Value::String(s)) if !s.is_empty() => s.as_str(),
            _ => {
                return Err(ApiError::invalid(
                    at("sensor"),
                    format!("{} must be a non-empty string", at("sensor")),
                ));
            }
        };
        let ts = time_field(o.get("ts").unwrap_or(&Value::Null), &at("ts"))?;
        let value = match o.get("value") {
            Some(Value::Null) => f64::NAN,
            Some(Value::Number(n)) => match n.as_f64() {
                Some(x) if x.is_finite() => x,
                _ => {
                    return Err(ApiError::invalid(
                        at("value"),
                        format!("{}: {n} is not a finite number", at("value")),
                    ));
                }
            },
            Some(other) => {
                return Err(ApiError::invalid(
                    at("value"),
                    format!(
                        "{}: {other} is not a number; NaN and infinities are refused, send null for a \
                         missing reading",
                        at("value")
                    ),
                ));
            }
            None => {
                return Err(ApiError::invalid(
                    at("value"),
                    format!("{} is missing; send null for a missing reading", at("value")),
                ));
            }
        };
        let good = quality(o.get("quality"), &at("quality"))?;
        c.push(i, "readings", sensor, ts, value, good)?;
    }
    c.finish(asset, from, to, lim)
}

/// Readings gathered by sensor, checked as they come.
#[derive(Debug, Default)]
pub(crate) struct Collector {
    sensors: BTreeMap<String, (SensorReadings, usize)>,
    n: usize,
}

impl Collector {
    /// Adds reading `i` (of the list named `list`: `readings` in JSON, `rows` in Arrow).
    pub(crate) fn push(
        &mut self,
        i: usize,
        list: &str,
        sensor: &str,
        ts: i64,
        value: f64,
        good: bool,
    ) -> Result<(), ApiError> {
        let at = format!("{list}[{i}].ts");
        let (s, last) = match self.sensors.get_mut(sensor) {
            Some(e) => e,
            None => self
                .sensors
                .entry(sensor.to_owned())
                .or_insert_with(|| (SensorReadings::default(), i)),
        };
        if let Some(&prev) = s.ts_ms.last() {
            if ts == prev {
                return Err(ApiError::invalid(
                    &at,
                    format!(
                        "{at}: sensor {sensor:?} already has a reading at this time ({list}[{last}]); \
                         send one reading per sensor and time"
                    ),
                ));
            }
            if ts < prev {
                return Err(ApiError::invalid(
                    &at,
                    format!(
                        "{at}: sensor {sensor:?} goes back in time after {list}[{last}]; send each \
                         sensor's readings in increasing time"
                    ),
                ));
            }
        }
        s.ts_ms.push(ts);
        s.value.push(value);
        s.good.push(good);
        *last = i;
        self.n += 1;
        Ok(())
    }

    /// Checks the span and returns the window.
    pub(crate) fn finish(
        self,
        asset: String,
        from: Option<i64>,
        to: Option<i64>,
        lim: &WindowLimits,
    ) -> Result<Window, ApiError> {
        let sensors = self.sensors;
        let first =
            sensors.values().filter_map(|(s, _)| s.ts_ms.first()).min().copied().unwrap_or(0);
        let last = sensors.values().filter_map(|(s, _)| s.ts_ms.last()).max().copied().unwrap_or(0);
        let from_ms = from.unwrap_or(first);
        let to_ms = to.unwrap_or(last + 1);
        if from_ms >= to_ms {
            return Err(ApiError::invalid(
                "to",
                "to must be after from; the window [from, to) would be empty",
            ));
        }
        let hours = |ms: i64| ms as f64 / 3_600_000.0;
        if to_ms - from_ms > lim.max_span_ms || last - first > lim.max_span_ms {
            return Err(ApiError::invalid(
                if last - first > lim.max_span_ms { "readings" } else { "to" },
                format!(
                    "the window spans {:.1} h, more than the limit of {:.1} h; split it",
                    hours((to_ms - from_ms).max(last - first)),
                    hours(lim.max_span_ms)
                ),
            ));
        }
        if last >= to_ms {
            return Err(ApiError::invalid(
                "to",
                "readings at or after to; move to past the last reading or leave it out",
            ));
        }
        if first < from_ms - lim.warmup_ms {
            return Err(ApiError::invalid(
                "from",
                format!(
                    "readings start {:.1} h before from, more than the warm-up of {:.1} h; move \
                     from earlier or send fewer old readings",
                    hours(from_ms - first),
                    hours(lim.warmup_ms)
                ),
            ));
        }
        Ok(Window {
            asset,
            from_ms,
            to_ms,
            sensors: sensors.into_iter().map(|(k, (s, _))| (k, s)).collect(),
            readings: self.n,
        })
    }
}

#[cfg(test)]
mod tests {
    #![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]
    use super::*;

    const LIM: WindowLimits =
        WindowLimits { max_readings: 10, max_span_ms: 86_400_000, warmup_ms: 3_600_000 };

    fn field_of(body: &str) -> String {
        match parse_json(body.as_bytes(), &LIM) {
            Err(ApiError::Invalid { field, .. }) => field,
            other => panic!("expected an invalid field, got {other:?}"),
        }
    }

    #[test]
    fn a_good_window_parses_with_defaults() {
        let w = parse_json(
            br#"{"asset":"p1","readings":[
                {"sensor":"flow","ts":"2026-05-06T00:00:00Z","value":1.5},
                {"sensor":"flow","ts":"2026-05-06T00:05:00Z","value":null,"quality":"bad"},
                {"sensor":"temp","ts":"2026-05-06T00:01:00+01:00","value":40}]}"#,
            &LIM,
        )
        .unwrap();
        assert_eq!(w.readings, 3);
        let f = &w.sensors["flow"];
        assert_eq!(f.ts_ms.len(), 2);
        assert!(f.value[1].is_nan() && !f.good[1] && f.good[0]);
        // temp's reading is 23:01 the day before, in UTC: the earliest
        assert_eq!(w.from_ms, w.sensors["temp"].ts_ms[0]);
        assert_eq!(w.to_ms, f.ts_ms[1] + 1);
    }

    #[test]
    fn every_bad_field_is_named() {
        let r = |extra: &str| {
            format!(
                r#"{{"asset":"p1","readings":[{{"sensor":"flow","ts":"2026-05-06T00:00:00Z","value":1}}{extra}]}}"#
            )
        };
        assert_eq!(field_of(r#"{"readings":[]}"#), "asset");
        assert_eq!(field_of(r#"{"asset":"p1","readings":[]}"#), "readings");
        assert_eq!(field_of(r#"{"asset":"p1","readings":[], "x":1}"#), "x");
        assert_eq!(
            field_of(&r(r#",{"sensor":"flow","ts":"yesterday","value":1}"#)),
            "readings[1].ts"
        );
        assert_eq!(
            field_of(&r(r#",{"sensor":"flow","ts":"2026-05-06T00:01:00Z","value":"NaN"}"#)),
            "readings[1].value"
        );
        assert_eq!(
            field_of(&r(r#",{"sensor":"flow","ts":"2026-05-06T00:01:00Z"}"#)),
            "readings[1].value"
        );
        assert_eq!(
            field_of(&r(r#",{"sensor":"","ts":"2026-05-06T00:01:00Z","value":1}"#)),
            "readings[1].sensor"
        );
        assert_eq!(
            field_of(&r(r#",{"sensor":"flow","ts":"2026-05-06T00:00:00Z","value":2}"#)),
            "readings[1].ts"
        );
        assert_eq!(
            field_of(&r(r#",{"sensor":"flow","ts":"2026-05-05T23:00:00Z","value":2}"#)),
            "readings[1].ts"
        );
        assert_eq!(
            field_of(&r(
                r#",{"sensor":"flow","ts":"2026-05-06T00:01:00Z","value":2,"quality":"meh"}"#
            )),
            "readings[1].quality"
        );
        // spans: more than a day; to before the last reading; readings long before from
        assert_eq!(
            field_of(&r(r#",{"sensor":"flow","ts":"2026-05-08T00:00:00Z","value":2}"#)),
            "readings"
        );
        let w = r#"{"asset":"p1","to":"2026-05-06T00:00:00Z","readings":[{"sensor":"f","ts":"2026-05-06T00:00:00Z","value":1}]}"#;
        assert_eq!(field_of(w), "to");
        let w = r#"{"asset":"p1","from":"2026-05-06T05:00:00Z","to":"2026-05-06T06:00:00Z","readings":[{"sensor":"f","ts":"2026-05-06T00:00:00Z","value":1}]}"#;
        assert_eq!(field_of(w), "from");
        let many: String = (0..11)
            .map(|i| format!(r#"{{"sensor":"f","ts":"2026-05-06T00:{i:02}:00Z","value":1}}"#))
            .collect::<Vec<_>>()
            .join(",");
        assert_eq!(field_of(&format!(r#"{{"asset":"p1","readings":[{many}]}}"#)), "readings");
        // an overflowing number is not JSON serde can hold: 400 on the body
        match parse_json(br#"{"asset":"p1","readings":[{"sensor":"f","ts":"2026-05-06T00:00:00Z","value":1e999}]}"#, &LIM) {
            Err(ApiError::Invalid { status, field, .. }) => {
                assert_eq!((status.as_u16(), field.as_str()), (400, "body"));
            }
            other => panic!("{other:?}"),
        }
    }
}
