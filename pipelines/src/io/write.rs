//! Writing history in the long format of DESIGN.md 4.1.
//!
//! ```text
//! asset (Dictionary<Int32, Utf8>) | sensor (Dictionary<Int32, Utf8>) | ts (Timestamp(ms, "UTC")) | value (Float64)
//! ```
//!
//! Rows are written in the order given; callers that want the layout the
//! reader likes best write one asset at a time, sensors in turn, in time
//! order, so that one asset's rows sit in a few neighbouring row groups.

use crate::error::{Error, Result};
use arrow_array::builder::{Float64Builder, StringDictionaryBuilder, TimestampMillisecondBuilder};
use arrow_array::types::Int32Type;
use arrow_array::{ArrayRef, RecordBatch};
use arrow_schema::{DataType, Field, Schema, SchemaRef, TimeUnit};
use parquet::arrow::ArrowWriter;
use parquet::basic::{Compression, ZstdLevel};
use parquet::file::properties::WriterProperties;
use std::fs::File;
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// Options for [`HistoryWriter`].
#[derive(Debug, Clone, Copy)]
pub struct HistoryWriterOptions {
    /// Rows per Parquet row group (default 1,048,576).
    pub row_group_rows: usize,
    /// Rows buffered before a record batch is handed to the writer (default 65,536).
    pub batch_rows: usize,
}

impl Default for HistoryWriterOptions {
    fn default() -> Self {
        Self { row_group_rows: 1 << 20, batch_rows: 1 << 16 }
    }
}

/// Streams long-format history rows into one Parquet file in bounded memory.
pub struct HistoryWriter {
    path: PathBuf,
    writer: ArrowWriter<File>,
    schema: SchemaRef,
    batch_rows: usize,
    asset: StringDictionaryBuilder<Int32Type>,
    sensor: StringDictionaryBuilder<Int32Type>,
    ts: TimestampMillisecondBuilder,
    value: Float64Builder,
    pending: usize,
    rows: u64,
}

impl HistoryWriter {
    /// The Arrow schema written: dictionary-encoded ids, millisecond UTC timestamps, f64 values.
    pub fn schema() -> SchemaRef {
        let dict = DataType::Dictionary(Box::new(DataType::Int32), Box::new(DataType::Utf8));
        Arc::new(Schema::new(vec![
            Field::new("asset", dict.clone(), false),
            Field::new("sensor", dict, false),
            Field::new("ts", DataType::Timestamp(TimeUnit::Millisecond, Some("UTC".into())), false),
            Field::new("value", DataType::Float64, true),
        ]))
    }

    /// Create (or truncate) `path`.
    ///
    /// # Errors
    /// [`Error::Io`] if the file cannot be created.
    pub fn try_new(path: impl AsRef<Path>, options: HistoryWriterOptions) -> Result<Self> {
        let path = path.as_ref().to_path_buf();
        let file = File::create(&path).map_err(|e| Error::io(&path, e))?;
        let props = WriterProperties::builder()
            .set_compression(Compression::ZSTD(ZstdLevel::try_new(1).unwrap_or_default()))
            .set_max_row_group_row_count(Some(options.row_group_rows.max(1)))
            .build();
        let schema = Self::schema();
        let writer = ArrowWriter::try_new(file, schema.clone(), Some(props))
            .map_err(|source| Error::ParquetWrite { path: path.clone(), source })?;
        let batch_rows = options.batch_rows.max(1);
        Ok(Self {
            path,
            writer,
            schema,
            batch_rows,
            asset: StringDictionaryBuilder::new(),
            sensor: StringDictionaryBuilder::new(),
            ts: TimestampMillisecondBuilder::with_capacity(batch_rows).with_timezone("UTC"),
            value: Float64Builder::with_capacity(batch_rows),
            pending: 0,
            rows: 0,
        })
    }

    /// Append one sensor's readings. `ts_ms` (epoch milliseconds) and `values`
    /// must have the same length; NaN values are written as null (missing).
    ///
    /// # Panics
    /// If `ts_ms.len() != values.len()`.
    ///
    /// # Errors
    /// A Parquet error when a full batch cannot be written.
    pub fn write_series(
        &mut self,
        asset: &str,
        sensor: &str,
        ts_ms: &[i64],
        values: &[f64],
    ) -> Result<()> {
        assert_eq!(ts_ms.len(), values.len(), "ts and value lengths differ");
        for (&t, &v) in ts_ms.iter().zip(values) {
            self.asset.append_value(asset);
            self.sensor.append_value(sensor);
            self.ts.append_value(t);
            if v.is_nan() {
                self.value.append_null();
            } else {
                self.value.append_value(v);
            }
            self.pending += 1;
            if self.pending >= self.batch_rows {
                self.flush()?;
            }
        }
        Ok(())
    }

    fn flush(&mut self) -> Result<()> {
        if self.pending == 0 {
            return Ok(());
        }
        let columns: Vec<ArrayRef> = vec![
            Arc::new(self.asset.finish()),
            Arc::new(self.sensor.finish()),
            Arc::new(self.ts.finish().with_timezone("UTC")),
            Arc::new(self.value.finish()),
        ];
        let batch = RecordBatch::try_new(self.schema.clone(), columns)
            .map_err(|e| Error::bad_input(&self.path, format!("building a record batch: {e}")))?;
        self.writer
            .write(&batch)
            .map_err(|source| Error::ParquetWrite { path: self.path.clone(), source })?;
        self.rows += self.pending as u64;
        self.pending = 0;
        Ok(())
    }

    /// Rows written so far (including buffered ones).
    pub fn rows(&self) -> u64 {
        self.rows + self.pending as u64
    }

    /// Flush and write the footer. A file is only valid after `close`.
    ///
    /// # Errors
    /// A Parquet error if the final batch or the footer cannot be written.
    pub fn close(mut self) -> Result<u64> {
        self.flush()?;
        self.writer
            .close()
            .map_err(|source| Error::ParquetWrite { path: self.path.clone(), source })?;
        Ok(self.rows)
    }
}
