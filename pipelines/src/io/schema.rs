//! The history columns of DESIGN.md 4.1: which Arrow types are accepted and
//! how each is turned into the reader's internal form (dense id, epoch ms,
//! `f64` with NaN for missing, a good/not-good flag).

use arrow_array::cast::AsArray;
use arrow_array::types::{
    Float32Type, Float64Type, Int8Type, Int16Type, Int32Type, Int64Type, TimestampMicrosecondType,
    TimestampMillisecondType, TimestampNanosecondType, TimestampSecondType, UInt8Type, UInt16Type,
    UInt32Type, UInt64Type,
};
use arrow_array::{Array, ArrayRef, ArrowPrimitiveType};
use arrow_buffer::NullBuffer;
use arrow_schema::{DataType, Schema, TimeUnit};
use std::collections::HashMap;

/// Earliest accepted reading time: 1900-01-01T00:00:00Z in epoch ms.
///
/// A plausibility bound, not a format limit: a time outside
/// [`MIN_TS_MS`, `MAX_TS_MS`) nearly always means a unit read too coarse
/// (milliseconds or nanoseconds declared as seconds lands far past 2200).
/// The opposite mistake (seconds declared as milliseconds) lands in January
/// 1970, inside the bounds, and is not caught here.
pub const MIN_TS_MS: i64 = -2_208_988_800_000;
/// First rejected reading time: 2200-01-01T00:00:00Z in epoch ms.
pub const MAX_TS_MS: i64 = 7_258_118_400_000;

/// How the `ts` column is stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum TsKind {
    /// Arrow Timestamp in this unit (time zone ignored: the values are UTC instants).
    Timestamp(TimeUnit),
    /// Plain Int64 epoch milliseconds.
    EpochMs,
}

/// Positions (root column index in the file) and kinds of the history columns.
#[derive(Debug, Clone)]
pub(crate) struct Columns {
    pub(crate) asset: usize,
    pub(crate) sensor: usize,
    pub(crate) ts: usize,
    pub(crate) value: usize,
    pub(crate) quality: Option<usize>,
    pub(crate) ts_kind: TsKind,
}

fn is_id_type(t: &DataType) -> bool {
    match t {
        DataType::Utf8 | DataType::LargeUtf8 => true,
        DataType::Dictionary(k, v) => {
            k.is_integer() && matches!(v.as_ref(), DataType::Utf8 | DataType::LargeUtf8)
        }
        _ => false,
    }
}

fn is_value_type(t: &DataType) -> bool {
    t.is_integer() || matches!(t, DataType::Float64 | DataType::Float32)
}

/// Check the Arrow schema of one file against DESIGN.md 4.1.
///
/// # Errors
/// A message naming the column, its type, what is accepted and what to do.
pub(crate) fn check_schema(schema: &Schema) -> Result<Columns, String> {
    let find = |name: &str| -> Result<(usize, &DataType), String> {
        schema.index_of(name).map(|i| (i, schema.field(i).data_type())).map_err(|_| {
            let have: Vec<&str> = schema.fields().iter().map(|f| f.name().as_str()).collect();
            format!(
                "missing column `{name}` (columns present: {}); history needs asset, sensor, ts \
                 and value",
                have.join(", ")
            )
        })
    };
    let (asset, at) = find("asset")?;
    let (sensor, st) = find("sensor")?;
    let (ts, tt) = find("ts")?;
    let (value, vt) = find("value")?;
    for (name, t) in [("asset", at), ("sensor", st)] {
        if !is_id_type(t) {
            return Err(format!(
                "column `{name}` has type {t}; ids must be UTF-8 strings (Utf8, LargeUtf8 or \
                 Dictionary of Utf8); write the column as a string column"
            ));
        }
    }
    let ts_kind = match tt {
        DataType::Timestamp(unit, _) => TsKind::Timestamp(*unit),
        DataType::Int64 => TsKind::EpochMs,
        other => {
            return Err(format!(
                "column `ts` has type {other}; use a Timestamp (s, ms, us or ns) or Int64 epoch \
                 milliseconds"
            ));
        }
    };
    if !is_value_type(vt) {
        return Err(format!(
            "column `value` has type {vt}; use Float64, Float32 or an integer type (missing \
             readings as null or NaN)"
        ));
    }
    let quality = match schema.index_of("quality") {
        Err(_) => None,
        Ok(i) => {
            let qt = schema.field(i).data_type();
            if *qt != DataType::UInt8 && !is_id_type(qt) {
                return Err(format!(
                    "column `quality` has type {qt}; use UInt8 (0 = good) or Utf8 \
                     (good/uncertain/bad), or drop the column"
                ));
            }
            Some(i)
        }
    };
    Ok(Columns { asset, sensor, ts, value, quality, ts_kind })
}

/// Interned strings of one decoded chunk: ids are dense, in first-seen order.
#[derive(Debug, Default)]
pub(crate) struct LocalDict {
    map: HashMap<String, u32>,
    pub(crate) names: Vec<String>,
}

impl LocalDict {
    pub(crate) fn intern(&mut self, s: &str) -> u32 {
        if let Some(&id) = self.map.get(s) {
            return id;
        }
        let id = self.names.len() as u32;
        self.map.insert(s.to_owned(), id);
        self.names.push(s.to_owned());
        id
    }
}

fn map_str_iter<'a>(
    values: impl Iterator<Item = Option<&'a str>>,
    dict: &mut LocalDict,
    out: &mut Vec<u32>,
) -> Result<(), usize> {
    // Runs of one id are the common case (files written asset by asset), so
    // compare with the previous string before hashing.
    let mut last: Option<(&str, u32)> = None;
    for (i, v) in values.enumerate() {
        let s = v.ok_or(i)?;
        match last {
            Some((ls, id)) if ls == s => out.push(id),
            _ => {
                let id = dict.intern(s);
                last = Some((s, id));
                out.push(id);
            }
        }
    }
    Ok(())
}

/// Append the dense id of each row of an id column to `out`.
///
/// # Errors
/// The row (0-based within `arr`) of the first null id.
pub(crate) fn map_ids(
    arr: &ArrayRef,
    dict: &mut LocalDict,
    out: &mut Vec<u32>,
) -> Result<(), usize> {
    match arr.data_type() {
        DataType::Utf8 => map_str_iter(arr.as_string::<i32>().iter(), dict, out),
        DataType::LargeUtf8 => map_str_iter(arr.as_string::<i64>().iter(), dict, out),
        DataType::Dictionary(_, _) => {
            let d = arr.as_any_dictionary();
            let vals = d.values();
            // Map the (small) dictionary once per batch, then each row is a Vec lookup.
            let mut table: Vec<Option<u32>> = Vec::with_capacity(vals.len());
            match vals.data_type() {
                DataType::LargeUtf8 => {
                    table.extend(vals.as_string::<i64>().iter().map(|v| v.map(|s| dict.intern(s))))
                }
                _ => {
                    table.extend(vals.as_string::<i32>().iter().map(|v| v.map(|s| dict.intern(s))))
                }
            }
            let keys = d.normalized_keys();
            let nulls = arr.logical_nulls();
            out.reserve(keys.len());
            for (i, k) in keys.iter().enumerate() {
                if nulls.as_ref().is_some_and(|n| n.is_null(i)) {
                    return Err(i);
                }
                out.push(table.get(*k).copied().flatten().ok_or(i)?);
            }
            Ok(())
        }
        // check_schema admits nothing else
        _ => Err(0),
    }
}

/// Why a `ts` value was rejected.
#[derive(Debug)]
pub(crate) enum TsError {
    Null(usize),
    OutOfRange(usize, i64),
}

/// Append `ts` as epoch milliseconds to `out`. Sub-millisecond precision is
/// truncated toward the earlier millisecond (floor).
pub(crate) fn ts_to_ms(arr: &ArrayRef, kind: TsKind, out: &mut Vec<i64>) -> Result<(), TsError> {
    fn parts<T: ArrowPrimitiveType<Native = i64>>(arr: &ArrayRef) -> (&[i64], Option<&NullBuffer>) {
        let a = arr.as_primitive::<T>();
        (a.values(), a.nulls())
    }
    let (v, nulls) = match arr.data_type() {
        DataType::Timestamp(TimeUnit::Second, _) => parts::<TimestampSecondType>(arr),
        DataType::Timestamp(TimeUnit::Millisecond, _) => parts::<TimestampMillisecondType>(arr),
        DataType::Timestamp(TimeUnit::Microsecond, _) => parts::<TimestampMicrosecondType>(arr),
        DataType::Timestamp(TimeUnit::Nanosecond, _) => parts::<TimestampNanosecondType>(arr),
        _ => parts::<Int64Type>(arr),
    };
    if let Some(n) = nulls.filter(|n| n.null_count() > 0) {
        let i = (0..v.len()).find(|&i| n.is_null(i)).unwrap_or(0);
        return Err(TsError::Null(i));
    }
    let start = out.len();
    out.reserve(v.len());
    let check = |i: usize, raw: i64, ms: Option<i64>| -> Result<i64, TsError> {
        match ms {
            Some(ms) if (MIN_TS_MS..MAX_TS_MS).contains(&ms) => Ok(ms),
            _ => Err(TsError::OutOfRange(i, raw)),
        }
    };
    let r = (|| {
        match kind {
            TsKind::EpochMs | TsKind::Timestamp(TimeUnit::Millisecond) => {
                for (i, &x) in v.iter().enumerate() {
                    out.push(check(i, x, Some(x))?);
                }
            }
            TsKind::Timestamp(TimeUnit::Second) => {
                for (i, &x) in v.iter().enumerate() {
                    out.push(check(i, x, x.checked_mul(1000))?);
                }
            }
            TsKind::Timestamp(TimeUnit::Microsecond) => {
                for (i, &x) in v.iter().enumerate() {
                    out.push(check(i, x, Some(x.div_euclid(1000)))?);
                }
            }
            TsKind::Timestamp(TimeUnit::Nanosecond) => {
                for (i, &x) in v.iter().enumerate() {
                    out.push(check(i, x, Some(x.div_euclid(1_000_000)))?);
                }
            }
        }
        Ok(())
    })();
    if r.is_err() {
        out.truncate(start);
    }
    r
}

/// Convert one raw statistic of `ts` in `unit` to epoch ms (floor).
pub(crate) fn raw_to_ms(x: i64, unit: TimeUnit) -> i64 {
    match unit {
        TimeUnit::Second => x.saturating_mul(1000),
        TimeUnit::Millisecond => x,
        TimeUnit::Microsecond => x.div_euclid(1000),
        TimeUnit::Nanosecond => x.div_euclid(1_000_000),
    }
}

fn push_prim<T: ArrowPrimitiveType>(
    arr: &ArrayRef,
    out: &mut Vec<f64>,
    f: impl Fn(T::Native) -> f64,
) {
    let a = arr.as_primitive::<T>();
    out.reserve(a.len());
    match a.nulls().filter(|n| n.null_count() > 0) {
        None => out.extend(a.values().iter().map(|&x| f(x))),
        Some(n) => out.extend(
            a.values().iter().enumerate().map(|(i, &x)| if n.is_null(i) { f64::NAN } else { f(x) }),
        ),
    }
}

/// Append `value` as `f64` (null becomes NaN) to `out`.
pub(crate) fn values_to_f64(arr: &ArrayRef, out: &mut Vec<f64>) {
    match arr.data_type() {
        DataType::Float64 => push_prim::<Float64Type>(arr, out, |x| x),
        DataType::Float32 => push_prim::<Float32Type>(arr, out, f64::from),
        DataType::Int8 => push_prim::<Int8Type>(arr, out, f64::from),
        DataType::Int16 => push_prim::<Int16Type>(arr, out, f64::from),
        DataType::Int32 => push_prim::<Int32Type>(arr, out, f64::from),
        DataType::Int64 => push_prim::<Int64Type>(arr, out, |x| x as f64),
        DataType::UInt8 => push_prim::<UInt8Type>(arr, out, f64::from),
        DataType::UInt16 => push_prim::<UInt16Type>(arr, out, f64::from),
        DataType::UInt32 => push_prim::<UInt32Type>(arr, out, f64::from),
        DataType::UInt64 => push_prim::<UInt64Type>(arr, out, |x| x as f64),
        // check_schema admits nothing else
        _ => out.extend(std::iter::repeat_n(f64::NAN, arr.len())),
    }
}

fn quality_word(s: &str) -> Option<bool> {
    if s.eq_ignore_ascii_case("good") {
        Some(true)
    } else if s.eq_ignore_ascii_case("uncertain") || s.eq_ignore_ascii_case("bad") {
        Some(false)
    } else {
        None
    }
}

/// Append the good flag of each row to `out`: UInt8 0 or the word `good`
/// (any case) is good; null quality counts as good (no flag given).
///
/// # Errors
/// The row (0-based) and text of the first word that is not good/uncertain/bad.
pub(crate) fn quality_to_good(arr: &ArrayRef, out: &mut Vec<bool>) -> Result<(), (usize, String)> {
    match arr.data_type() {
        DataType::UInt8 => {
            let a = arr.as_primitive::<UInt8Type>();
            out.extend(a.iter().map(|q| q.is_none_or(|q| q == 0)));
            Ok(())
        }
        DataType::Utf8 | DataType::LargeUtf8 | DataType::Dictionary(_, _) => {
            let mut dict = LocalDict::default();
            let mut ids = Vec::with_capacity(arr.len());
            let nulls = arr.logical_nulls();
            // nulls are good; map them through a placeholder word
            let res = if nulls.as_ref().is_some_and(|n| n.null_count() > 0) {
                let filled = arrow_array::StringArray::from_iter((0..arr.len()).map(|i| {
                    if nulls.as_ref().is_some_and(|n| n.is_null(i)) {
                        Some("good".to_owned())
                    } else {
                        string_at(arr, i)
                    }
                }));
                map_ids(&(std::sync::Arc::new(filled) as ArrayRef), &mut dict, &mut ids)
            } else {
                map_ids(arr, &mut dict, &mut ids)
            };
            res.map_err(|i| (i, String::new()))?;
            let mut table = Vec::with_capacity(dict.names.len());
            for name in &dict.names {
                table.push(quality_word(name));
            }
            for (i, &id) in ids.iter().enumerate() {
                match table[id as usize] {
                    Some(g) => out.push(g),
                    None => return Err((i, dict.names[id as usize].clone())),
                }
            }
            Ok(())
        }
        _ => {
            out.extend(std::iter::repeat_n(true, arr.len()));
            Ok(())
        }
    }
}

fn string_at(arr: &ArrayRef, i: usize) -> Option<String> {
    match arr.data_type() {
        DataType::Utf8 => Some(arr.as_string::<i32>().value(i).to_owned()),
        DataType::LargeUtf8 => Some(arr.as_string::<i64>().value(i).to_owned()),
        DataType::Dictionary(_, _) => {
            let d = arr.as_any_dictionary();
            let k = *d.normalized_keys().get(i)?;
            let v = d.values();
            match v.data_type() {
                DataType::LargeUtf8 => Some(v.as_string::<i64>().value(k).to_owned()),
                _ => Some(v.as_string::<i32>().value(k).to_owned()),
            }
        }
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::{NaiveDate, TimeZone, Utc};

    #[test]
    fn plausibility_bounds_are_the_documented_dates() {
        // the constants must be exactly 1900-01-01 and 2200-01-01 UTC (chrono computes them)
        let lo = Utc.from_utc_datetime(
            &NaiveDate::from_ymd_opt(1900, 1, 1).unwrap().and_hms_opt(0, 0, 0).unwrap(),
        );
        let hi = Utc.from_utc_datetime(
            &NaiveDate::from_ymd_opt(2200, 1, 1).unwrap().and_hms_opt(0, 0, 0).unwrap(),
        );
        assert_eq!(lo.timestamp_millis(), MIN_TS_MS);
        assert_eq!(hi.timestamp_millis(), MAX_TS_MS);
    }

    #[test]
    fn sub_millisecond_times_floor() {
        assert_eq!(raw_to_ms(1_999_999, TimeUnit::Nanosecond), 1);
        assert_eq!(raw_to_ms(-1, TimeUnit::Nanosecond), -1);
        assert_eq!(raw_to_ms(-1, TimeUnit::Microsecond), -1);
        assert_eq!(raw_to_ms(7, TimeUnit::Second), 7000);
    }

    #[test]
    fn quality_words() {
        assert_eq!(quality_word("GOOD"), Some(true));
        assert_eq!(quality_word("uncertain"), Some(false));
        assert_eq!(quality_word("bad"), Some(false));
        assert_eq!(quality_word("ok"), None);
    }
}
