//! Scoring requests as an Arrow IPC stream (`application/vnd.apache.arrow.stream`):
//! record batches with the history columns of DESIGN.md 4.1 less `asset`,
//! which comes with `from` and `to` in the query string
//! (`/v1/windows/score?asset=north-b1&from=...&to=...`).
//!
//! | column | types accepted |
//! |---|---|
//! | `sensor` | Utf8, LargeUtf8, Dictionary(integer, Utf8) |
//! | `ts` | Timestamp (any unit; floored to ms), Int64 epoch ms |
//! | `value` | Float64, Float32, Int64, Int32; null = a missing reading, NaN and infinities refused |
//! | `quality` | optional; UInt8 (0 = good) or Utf8 (`good`/`uncertain`/`bad`) |
//!
//! Rows are numbered over the whole stream (`rows[i]`) in error fields.

use super::error::ApiError;
use super::window::{Collector, Window, WindowLimits};
use arrow_array::cast::AsArray;
use arrow_array::types::{
    Float32Type, Float64Type, Int32Type, Int64Type, TimestampMicrosecondType,
    TimestampMillisecondType, TimestampNanosecondType, TimestampSecondType, UInt8Type,
};
use arrow_array::{Array, ArrayRef, RecordBatch};
use arrow_schema::{DataType, TimeUnit};

fn column<'a>(b: &'a RecordBatch, name: &str) -> Option<&'a ArrayRef> {
    b.schema().index_of(name).ok().map(|i| b.column(i))
}

fn strings<'a>(a: &'a ArrayRef, field: &str) -> Result<Vec<Option<&'a str>>, ApiError> {
    let bad = || {
        ApiError::invalid(
            field,
            format!(
                "column {field} is {}; send Utf8, LargeUtf8 or a Utf8 dictionary",
                a.data_type()
            ),
        )
    };
    // borrowed from the batch: no string is copied
    Ok(match a.data_type() {
        DataType::Utf8 => a.as_string::<i32>().iter().collect(),
        DataType::LargeUtf8 => a.as_string::<i64>().iter().collect(),
        DataType::Dictionary(_, v) if **v == DataType::Utf8 => {
            let d = a.as_any_dictionary_opt().ok_or_else(bad)?;
            let values = d.values().as_string::<i32>();
            let keys = d.normalized_keys();
            (0..a.len()).map(|i| (!a.is_null(i)).then(|| values.value(keys[i]))).collect()
        }
        _ => return Err(bad()),
    })
}

fn times_ms(a: &ArrayRef) -> Result<Vec<Option<i64>>, ApiError> {
    fn get<T: arrow_array::ArrowPrimitiveType<Native = i64>>(
        a: &ArrayRef,
        f: impl Fn(i64) -> Option<i64>,
    ) -> Vec<Option<i64>> {
        a.as_primitive::<T>().iter().map(|v| v.and_then(&f)).collect()
    }
    Ok(match a.data_type() {
        DataType::Timestamp(TimeUnit::Second, _) => {
            get::<TimestampSecondType>(a, |x| x.checked_mul(1000))
        }
        DataType::Timestamp(TimeUnit::Millisecond, _) => get::<TimestampMillisecondType>(a, Some),
        DataType::Timestamp(TimeUnit::Microsecond, _) => {
            get::<TimestampMicrosecondType>(a, |x| Some(x.div_euclid(1000)))
        }
        DataType::Timestamp(TimeUnit::Nanosecond, _) => {
            get::<TimestampNanosecondType>(a, |x| Some(x.div_euclid(1_000_000)))
        }
        DataType::Int64 => get::<Int64Type>(a, Some),
        other => {
            return Err(ApiError::invalid(
                "ts",
                format!("column ts is {other}; send a Timestamp or Int64 epoch milliseconds"),
            ));
        }
    })
}

fn values(a: &ArrayRef) -> Result<Vec<Option<f64>>, ApiError> {
    Ok(match a.data_type() {
        DataType::Float64 => a.as_primitive::<Float64Type>().iter().collect(),
        DataType::Float32 => {
            a.as_primitive::<Float32Type>().iter().map(|v| v.map(f64::from)).collect()
        }
        DataType::Int64 => {
            a.as_primitive::<Int64Type>().iter().map(|v| v.map(|x| x as f64)).collect()
        }
        DataType::Int32 => a.as_primitive::<Int32Type>().iter().map(|v| v.map(f64::from)).collect(),
        other => {
            return Err(ApiError::invalid(
                "value",
                format!("column value is {other}; send Float64, Float32, Int64 or Int32"),
            ));
        }
    })
}

fn qualities(a: Option<&ArrayRef>, n: usize) -> Result<Vec<bool>, ApiError> {
    let Some(a) = a else { return Ok(vec![true; n]) };
    match a.data_type() {
        DataType::UInt8 => {
            Ok(a.as_primitive::<UInt8Type>().iter().map(|q| q.is_none_or(|q| q == 0)).collect())
        }
        DataType::Utf8 | DataType::LargeUtf8 | DataType::Dictionary(..) => strings(a, "quality")?
            .into_iter()
            .map(|q| match q {
                None | Some("good") => Ok(true),
                Some("uncertain" | "bad") => Ok(false),
                Some(other) => Err(ApiError::invalid(
                    "quality",
                    format!("quality {other:?}: use good, uncertain or bad"),
                )),
            })
            .collect(),
        other => Err(ApiError::invalid(
            "quality",
            format!("column quality is {other}; send UInt8 (0 = good) or Utf8"),
        )),
    }
}

/// Parses and checks an Arrow IPC stream window for `asset` over `[from, to)`.
///
/// # Errors
/// 400 when the body is not an Arrow IPC stream; 422 naming the column or
/// row for anything else wrong.
pub fn parse_arrow(
    body: &[u8],
    asset: String,
    from: Option<i64>,
    to: Option<i64>,
    lim: &WindowLimits,
) -> Result<Window, ApiError> {
    let not_ipc = |e: arrow_schema::ArrowError| {
        ApiError::bad_request(
            "body",
            format!("the body is not an Arrow IPC stream ({e}); write it with an IPC StreamWriter"),
        )
    };
    let reader = arrow_ipc::reader::StreamReader::try_new(std::io::Cursor::new(body), None)
        .map_err(not_ipc)?;
    let mut c = Collector::default();
    let mut row = 0usize;
    for batch in reader {
        let b = batch.map_err(not_ipc)?;
        if row + b.num_rows() > lim.max_readings {
            return Err(ApiError::invalid(
                "rows",
                format!(
                    "more than the limit of {} readings per request; split the window",
                    lim.max_readings
                ),
            ));
        }
        let need = |name: &str| {
            column(&b, name).ok_or_else(|| {
                ApiError::invalid(
                    name,
                    format!("the stream has no {name} column; send sensor, ts and value"),
                )
            })
        };
        let sensor = strings(need("sensor")?, "sensor")?;
        let ts = times_ms(need("ts")?)?;
        let value = values(need("value")?)?;
        let good = qualities(column(&b, "quality"), b.num_rows())?;
        for i in 0..b.num_rows() {
            let r = row + i;
            let s = sensor[i].filter(|s| !s.is_empty()).ok_or_else(|| {
                ApiError::invalid(
                    format!("rows[{r}].sensor"),
                    format!("rows[{r}].sensor is null or empty"),
                )
            })?;
            let t = ts[i].ok_or_else(|| {
                ApiError::invalid(
                    format!("rows[{r}].ts"),
                    format!("rows[{r}].ts is null or out of range"),
                )
            })?;
            let v = match value[i] {
                None => f64::NAN,
                Some(x) if x.is_finite() => x,
                Some(x) => {
                    return Err(ApiError::invalid(
                        format!("rows[{r}].value"),
                        format!(
                            "rows[{r}].value is {x}; NaN and infinities are refused, send null for \
                             a missing reading"
                        ),
                    ));
                }
            };
            c.push(r, "rows", s, t, v, good[i])?;
        }
        row += b.num_rows();
    }
    if row == 0 {
        return Err(ApiError::invalid(
            "rows",
            "the stream holds no rows; send at least one reading",
        ));
    }
    c.finish(asset, from, to, lim)
}

#[cfg(test)]
mod tests {
    #![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]
    use super::*;
    use arrow_array::types::Int32Type;
    use arrow_array::{
        DictionaryArray, Float32Array, Int64Array, StringArray, TimestampSecondArray,
    };
    use arrow_schema::{Field, Schema};
    use std::sync::Arc;

    const LIM: WindowLimits =
        WindowLimits { max_readings: 100, max_span_ms: 86_400_000, warmup_ms: 3_600_000 };

    fn stream(cols: Vec<(&str, ArrayRef)>) -> Vec<u8> {
        let schema = Arc::new(Schema::new(
            cols.iter()
                .map(|(n, a)| Field::new(*n, a.data_type().clone(), true))
                .collect::<Vec<_>>(),
        ));
        let b =
            RecordBatch::try_new(schema.clone(), cols.into_iter().map(|c| c.1).collect()).unwrap();
        let mut out = Vec::new();
        let mut w = arrow_ipc::writer::StreamWriter::try_new(&mut out, &schema).unwrap();
        w.write(&b).unwrap();
        w.finish().unwrap();
        drop(w);
        out
    }

    #[test]
    fn dictionary_sensors_second_timestamps_and_nulls_are_read() {
        let sensor: DictionaryArray<Int32Type> =
            vec!["flow", "speed", "flow"].into_iter().collect();
        let body = stream(vec![
            ("sensor", Arc::new(sensor) as ArrayRef),
            (
                "ts",
                Arc::new(TimestampSecondArray::from(vec![
                    1_778_025_600,
                    1_778_025_600,
                    1_778_025_660,
                ])),
            ),
            ("value", Arc::new(Float32Array::from(vec![Some(1.5), None, Some(2.0)]))),
            ("quality", Arc::new(StringArray::from(vec!["good", "good", "bad"]))),
        ]);
        let w = parse_arrow(&body, "p1".into(), None, None, &LIM).unwrap();
        assert_eq!(w.readings, 3);
        let f = &w.sensors["flow"];
        assert_eq!(f.ts_ms, vec![1_778_025_600_000, 1_778_025_660_000]);
        assert_eq!((f.value[0], f.good[1]), (1.5, false));
        assert!(w.sensors["speed"].value[0].is_nan());
    }

    #[test]
    fn wrong_columns_and_values_are_named() {
        let field = |body: Vec<u8>| match parse_arrow(&body, "p1".into(), None, None, &LIM) {
            Err(ApiError::Invalid { field, .. }) => field,
            other => panic!("{other:?}"),
        };
        let s = || Arc::new(StringArray::from(vec!["flow", "flow"])) as ArrayRef;
        let t =
            || Arc::new(Int64Array::from(vec![1_778_025_600_000, 1_778_025_660_000])) as ArrayRef;
        assert_eq!(field(stream(vec![("sensor", s()), ("ts", t())])), "value");
        let inf = Arc::new(Float32Array::from(vec![1.0, f32::INFINITY])) as ArrayRef;
        assert_eq!(
            field(stream(vec![("sensor", s()), ("ts", t()), ("value", inf)])),
            "rows[1].value"
        );
        let text = Arc::new(StringArray::from(vec!["1", "2"])) as ArrayRef;
        assert_eq!(field(stream(vec![("sensor", s()), ("ts", t()), ("value", text)])), "value");
        let back =
            Arc::new(Int64Array::from(vec![1_778_025_660_000, 1_778_025_600_000])) as ArrayRef;
        let v = || Arc::new(Float32Array::from(vec![1.0, 2.0])) as ArrayRef;
        assert_eq!(
            field(stream(vec![("sensor", s()), ("ts", back), ("value", v())])),
            "rows[1].ts"
        );
    }
}
