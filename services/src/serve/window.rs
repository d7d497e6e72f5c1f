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
use serde::Deserialize;
use serde::de::value::{MapAccessDeserializer, SeqAccessDeserializer};
use serde::de::{DeserializeSeed, Deserializer, IgnoredAny, MapAccess, SeqAccess, Visitor};
use serde_json::Value;
use std::borrow::Cow;
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
    time_of(&Lite::of(v), &|| field.to_owned())
}

/// A JSON value as the window parser reads it: scalars borrowed from the
/// body where they can be, arrays and objects (always an error here) whole.
/// Parsing into this rather than into [`Value`] spares a map and owned
/// strings per reading; [`Lite::to_value`] gives back the [`Value`], so
/// error messages quote the input exactly as before.
#[derive(Debug, Clone, PartialEq)]
enum Lite<'a> {
    Null,
    Bool(bool),
    Num(serde_json::Number),
    Str(Cow<'a, str>),
    Other(Value),
}

impl<'a> Lite<'a> {
    fn of(v: &'a Value) -> Lite<'a> {
        match v {
            Value::Null => Lite::Null,
            Value::Bool(b) => Lite::Bool(*b),
            Value::Number(n) => Lite::Num(n.clone()),
            Value::String(s) => Lite::Str(Cow::Borrowed(s)),
            other => Lite::Other(other.clone()),
        }
    }

    fn to_value(&self) -> Value {
        match self {
            Lite::Null => Value::Null,
            Lite::Bool(b) => Value::Bool(*b),
            Lite::Num(n) => Value::Number(n.clone()),
            Lite::Str(s) => Value::String(s.to_string()),
            Lite::Other(v) => v.clone(),
        }
    }

    fn is_null(&self) -> bool {
        matches!(self, Lite::Null)
    }
}

impl std::fmt::Display for Lite<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        self.to_value().fmt(f)
    }
}

struct LiteVisitor;

impl<'de> Visitor<'de> for LiteVisitor {
    type Value = Lite<'de>;
    fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("any JSON value")
    }
    fn visit_unit<E: serde::de::Error>(self) -> Result<Lite<'de>, E> {
        Ok(Lite::Null)
    }
    fn visit_none<E: serde::de::Error>(self) -> Result<Lite<'de>, E> {
        Ok(Lite::Null)
    }
    fn visit_bool<E: serde::de::Error>(self, v: bool) -> Result<Lite<'de>, E> {
        Ok(Lite::Bool(v))
    }
    fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<Lite<'de>, E> {
        Ok(Lite::Num(v.into()))
    }
    fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<Lite<'de>, E> {
        Ok(Lite::Num(v.into()))
    }
    fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<Lite<'de>, E> {
        // serde_json gives only finite numbers
        Ok(serde_json::Number::from_f64(v).map_or(Lite::Null, Lite::Num))
    }
    fn visit_borrowed_str<E: serde::de::Error>(self, v: &'de str) -> Result<Lite<'de>, E> {
        Ok(Lite::Str(Cow::Borrowed(v)))
    }
    fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<Lite<'de>, E> {
        Ok(Lite::Str(Cow::Owned(v.to_owned())))
    }
    fn visit_string<E: serde::de::Error>(self, v: String) -> Result<Lite<'de>, E> {
        Ok(Lite::Str(Cow::Owned(v)))
    }
    fn visit_seq<A: SeqAccess<'de>>(self, seq: A) -> Result<Lite<'de>, A::Error> {
        Value::deserialize(SeqAccessDeserializer::new(seq)).map(Lite::Other)
    }
    fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<Lite<'de>, A::Error> {
        Value::deserialize(MapAccessDeserializer::new(map)).map(Lite::Other)
    }
}

impl<'de> Deserialize<'de> for Lite<'de> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(LiteVisitor)
    }
}

/// An object key, borrowed from the body when it has no escapes.
struct Key<'a>(Cow<'a, str>);

impl<'de> Deserialize<'de> for Key<'de> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = Key<'de>;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("a string")
            }
            fn visit_borrowed_str<E: serde::de::Error>(self, v: &'de str) -> Result<Key<'de>, E> {
                Ok(Key(Cow::Borrowed(v)))
            }
            fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<Key<'de>, E> {
                Ok(Key(Cow::Owned(v.to_owned())))
            }
            fn visit_string<E: serde::de::Error>(self, v: String) -> Result<Key<'de>, E> {
                Ok(Key(Cow::Owned(v)))
            }
        }
        d.deserialize_str(V)
    }
}

/// An object's entries in body order. A repeated key keeps its last value
/// and the smallest unknown key is the one reported, as with [`Value`]'s
/// sorted map.
#[derive(Debug, Default)]
struct Fields<'a, T>(Vec<(Cow<'a, str>, T)>);

impl<'a, T> Fields<'a, T> {
    fn get(&self, k: &str) -> Option<&T> {
        self.0.iter().rev().find(|(n, _)| n == k).map(|(_, v)| v)
    }

    fn unknown(&self, known: &[&str]) -> Option<&str> {
        self.0.iter().map(|(n, _)| n.as_ref()).filter(|n| !known.contains(n)).min()
    }
}

/// One element of `readings`.
#[derive(Debug)]
enum Reading<'a> {
    Object(Fields<'a, Lite<'a>>),
    NotObject,
}

impl<'de> Deserialize<'de> for Reading<'de> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = Reading<'de>;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("any JSON value")
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Reading<'de>, A::Error> {
                let mut f = Vec::with_capacity(4);
                while let Some(Key(k)) = map.next_key::<Key<'de>>()? {
                    f.push((k, map.next_value::<Lite<'de>>()?));
                }
                Ok(Reading::Object(Fields(f)))
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Reading<'de>, A::Error> {
                while seq.next_element::<IgnoredAny>()?.is_some() {}
                Ok(Reading::NotObject)
            }
            fn visit_unit<E: serde::de::Error>(self) -> Result<Reading<'de>, E> {
                Ok(Reading::NotObject)
            }
            fn visit_bool<E: serde::de::Error>(self, _: bool) -> Result<Reading<'de>, E> {
                Ok(Reading::NotObject)
            }
            fn visit_i64<E: serde::de::Error>(self, _: i64) -> Result<Reading<'de>, E> {
                Ok(Reading::NotObject)
            }
            fn visit_u64<E: serde::de::Error>(self, _: u64) -> Result<Reading<'de>, E> {
                Ok(Reading::NotObject)
            }
            fn visit_f64<E: serde::de::Error>(self, _: f64) -> Result<Reading<'de>, E> {
                Ok(Reading::NotObject)
            }
            fn visit_str<E: serde::de::Error>(self, _: &str) -> Result<Reading<'de>, E> {
                Ok(Reading::NotObject)
            }
        }
        d.deserialize_any(V)
    }
}

/// A top-level value: `readings` as an array of readings, anything else as a [`Lite`].
#[derive(Debug)]
enum TopValue<'a> {
    Readings(Vec<Reading<'a>>),
    Lite(Lite<'a>),
}

/// The body: an object's entries, or `None` for any other JSON value.
struct Doc<'a>(Option<Fields<'a, TopValue<'a>>>);

impl<'de> Deserialize<'de> for Doc<'de> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct ReadingsOrLite;
        impl<'de> DeserializeSeed<'de> for ReadingsOrLite {
            type Value = TopValue<'de>;
            fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<TopValue<'de>, D::Error> {
                d.deserialize_any(self)
            }
        }
        impl<'de> Visitor<'de> for ReadingsOrLite {
            type Value = TopValue<'de>;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("any JSON value")
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<TopValue<'de>, A::Error> {
                let mut v = Vec::with_capacity(seq.size_hint().unwrap_or(0).min(1 << 16));
                while let Some(r) = seq.next_element::<Reading<'de>>()? {
                    v.push(r);
                }
                Ok(TopValue::Readings(v))
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<TopValue<'de>, A::Error> {
                LiteVisitor.visit_map(map).map(TopValue::Lite)
            }
            fn visit_unit<E: serde::de::Error>(self) -> Result<TopValue<'de>, E> {
                Ok(TopValue::Lite(Lite::Null))
            }
            fn visit_bool<E: serde::de::Error>(self, v: bool) -> Result<TopValue<'de>, E> {
                LiteVisitor.visit_bool(v).map(TopValue::Lite)
            }
            fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<TopValue<'de>, E> {
                LiteVisitor.visit_i64(v).map(TopValue::Lite)
            }
            fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<TopValue<'de>, E> {
                LiteVisitor.visit_u64(v).map(TopValue::Lite)
            }
            fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<TopValue<'de>, E> {
                LiteVisitor.visit_f64(v).map(TopValue::Lite)
            }
            fn visit_borrowed_str<E: serde::de::Error>(
                self,
                v: &'de str,
            ) -> Result<TopValue<'de>, E> {
                LiteVisitor.visit_borrowed_str(v).map(TopValue::Lite)
            }
            fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<TopValue<'de>, E> {
                LiteVisitor.visit_str(v).map(TopValue::Lite)
            }
            fn visit_string<E: serde::de::Error>(self, v: String) -> Result<TopValue<'de>, E> {
                LiteVisitor.visit_string(v).map(TopValue::Lite)
            }
        }
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = Doc<'de>;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("any JSON value")
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Doc<'de>, A::Error> {
                let mut f = Vec::with_capacity(4);
                while let Some(Key(k)) = map.next_key::<Key<'de>>()? {
                    let v = if k == "readings" {
                        map.next_value_seed(ReadingsOrLite)?
                    } else {
                        TopValue::Lite(map.next_value::<Lite<'de>>()?)
                    };
                    f.push((k, v));
                }
                Ok(Doc(Some(Fields(f))))
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Doc<'de>, A::Error> {
                while seq.next_element::<IgnoredAny>()?.is_some() {}
                Ok(Doc(None))
            }
            fn visit_unit<E: serde::de::Error>(self) -> Result<Doc<'de>, E> {
                Ok(Doc(None))
            }
            fn visit_bool<E: serde::de::Error>(self, _: bool) -> Result<Doc<'de>, E> {
                Ok(Doc(None))
            }
            fn visit_i64<E: serde::de::Error>(self, _: i64) -> Result<Doc<'de>, E> {
                Ok(Doc(None))
            }
            fn visit_u64<E: serde::de::Error>(self, _: u64) -> Result<Doc<'de>, E> {
                Ok(Doc(None))
            }
            fn visit_f64<E: serde::de::Error>(self, _: f64) -> Result<Doc<'de>, E> {
                Ok(Doc(None))
            }
            fn visit_str<E: serde::de::Error>(self, _: &str) -> Result<Doc<'de>, E> {
                Ok(Doc(None))
            }
        }
        d.deserialize_any(V)
    }
}

/// A time; `field` names it in an error (built only then).
fn time_of(v: &Lite<'_>, field: &dyn Fn() -> String) -> Result<i64, ApiError> {
    let Lite::Str(s) = v else {
        let field = field();
        return Err(ApiError::invalid(
            &field,
            format!("{field} must be an RFC 3339 time string, got {v}"),
        ));
    };
    DateTime::parse_from_rfc3339(s).map(|t| t.timestamp_millis()).map_err(|e| {
        let field = field();
        ApiError::invalid(
            &field,
            format!(
                "{field}: {s:?} is not an RFC 3339 time ({e}); write e.g. 2026-05-06T10:00:00Z"
            ),
        )
    })
}

/// A quality flag; `field` names it in an error (built only then).
fn quality(v: Option<&Lite<'_>>, field: &dyn Fn() -> String) -> Result<bool, ApiError> {
    match v {
        None | Some(Lite::Null) => Ok(true),
        Some(Lite::Str(s)) => match s.as_ref() {
            "good" => Ok(true),
            "uncertain" | "bad" => Ok(false),
            _ => {
                let field = field();
                Err(ApiError::invalid(
                    &field,
                    format!("{field}: {s:?} is not a quality; use good, uncertain or bad"),
                ))
            }
        },
        Some(Lite::Num(n)) if n.as_u64().is_some_and(|q| q <= 255) => Ok(n.as_u64() == Some(0)),
        Some(other) => Err(ApiError::invalid(
            field(),
            format!(
                "{}: {other} is not a quality; use good, uncertain, bad or 0..255 (0 = good)",
                field()
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
    let doc: Doc<'_> = serde_json::from_slice(body).map_err(|e| {
        ApiError::bad_request(
            "body",
            format!("the body is not valid JSON ({e}); send a JSON object"),
        )
    })?;
    let obj = doc.0.ok_or_else(|| {
        ApiError::invalid("body", "the body must be a JSON object with asset and readings")
    })?;
    if let Some(k) = obj.unknown(&["asset", "from", "to", "readings"]) {
        return Err(ApiError::invalid(
            k,
            format!("unknown field {k:?}; a window has asset, from, to and readings"),
        ));
    }
    let lite = |k: &str| match obj.get(k) {
        None => None,
        Some(TopValue::Lite(l)) => Some(Cow::Borrowed(l)),
        // only `readings` is read as an array of readings
        Some(TopValue::Readings(_)) => Some(Cow::Owned(Lite::Other(Value::Array(Vec::new())))),
    };
    let asset = match lite("asset").as_deref() {
        Some(Lite::Str(s)) if !s.is_empty() => s.to_string(),
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
    let from = lite("from")
        .filter(|v| !v.is_null())
        .map(|v| time_of(&v, &|| "from".to_owned()))
        .transpose()?;
    let to = lite("to")
        .filter(|v| !v.is_null())
        .map(|v| time_of(&v, &|| "to".to_owned()))
        .transpose()?;
    let readings = match obj.get("readings") {
        None => {
            return Err(ApiError::invalid(
                "readings",
                "readings is missing; send an array of {sensor, ts, value}",
            ));
        }
        Some(TopValue::Lite(_)) => {
            return Err(ApiError::invalid(
                "readings",
                "readings must be an array of {sensor, ts, value}",
            ));
        }
        Some(TopValue::Readings(r)) => r,
    };
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
        let Reading::Object(o) = r else {
            return Err(ApiError::invalid(
                format!("readings[{i}]"),
                format!("readings[{i}] must be an object {{sensor, ts, value}}"),
            ));
        };
        if let Some(k) = o.unknown(&["sensor", "ts", "value", "quality"]) {
            return Err(ApiError::invalid(
                at(k),
                format!("{}: unknown field; a reading has sensor, ts, value and quality", at(k)),
            ));
        }
        let sensor = match o.get("sensor") {
            Some(Lite::Str(s)) if !s.is_empty() => s.as_ref(),
            _ => {
                return Err(ApiError::invalid(
                    at("sensor"),
                    format!("{} must be a non-empty string", at("sensor")),
                ));
            }
        };
        let ts = time_of(o.get("ts").unwrap_or(&Lite::Null), &|| at("ts"))?;
        let value = match o.get("value") {
            Some(Lite::Null) => f64::NAN,
            Some(Lite::Num(n)) => match n.as_f64() {
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
        let good = quality(o.get("quality"), &|| at("quality"))?;
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
        let (s, last) = match self.sensors.get_mut(sensor) {
            Some(e) => e,
            None => self
                .sensors
                .entry(sensor.to_owned())
                .or_insert_with(|| (SensorReadings::default(), i)),
        };
        if let Some(&prev) = s.ts_ms.last()
            && ts <= prev
        {
            let at = format!("{list}[{i}].ts");
            if ts == prev {
                return Err(ApiError::invalid(
                    &at,
                    format!(
                        "{at}: sensor {sensor:?} already has a reading at this time ({list}[{last}]); \
                         send one reading per sensor and time"
                    ),
                ));
            }
            return Err(ApiError::invalid(
                &at,
                format!(
                    "{at}: sensor {sensor:?} goes back in time after {list}[{last}]; send each \
                     sensor's readings in increasing time"
                ),
            ));
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
    fn escaped_keys_and_strings_and_repeated_keys_read_as_json_says() {
        // \u escapes make serde hand over owned strings rather than borrowed ones
        let w = parse_json(
            br#"{"asset":"p\u0031","asset":"p2","readings":[
                {"sens\u006fr":"fl\u006fw","ts":"2026-05-06T00:00:00Z","value":1,"value":2.5,
                 "quality":0},
                {"sensor":"flow","ts":"2026-05-06T00:01:00Z","value":3,"quality":7}]}"#,
            &LIM,
        )
        .unwrap();
        // a repeated key keeps its last value, as serde_json's map does
        assert_eq!(w.asset, "p2");
        let f = &w.sensors["flow"];
        assert_eq!((f.value[0], f.good[0], f.good[1]), (2.5, true, false));
        // the smallest unknown key is the one named, whatever its place
        assert_eq!(field_of(r#"{"zz":1,"asset":"p1","aa":2,"readings":[]}"#), "aa");
        // messages quote the input as JSON
        match parse_json(br#"{"asset":["p\"1"],"readings":[]}"#, &LIM) {
            Err(ApiError::Invalid { detail, .. }) => {
                assert_eq!(detail, r#"asset must be a non-empty string, got ["p\"1"]"#);
            }
            other => panic!("{other:?}"),
        }
        // a reading that is not an object, and JSON that breaks after a bad field: 400 first
        assert_eq!(field_of(r#"{"asset":"p1","readings":[[1,{"a":2}]]}"#), "readings[0]");
        match parse_json(br#"{"asset":"p1","readings":[{"x":1}],"#, &LIM) {
            Err(ApiError::Invalid { status, field, .. }) => {
                assert_eq!((status.as_u16(), field.as_str()), (400, "body"));
            }
            other => panic!("{other:?}"),
        }
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
