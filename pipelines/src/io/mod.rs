//! Reading and writing telltale's files.

pub mod read;
pub mod records;
mod schema;
pub mod write;

pub use read::{
    AssetHistory, AssetIndex, AssetInventory, BadFile, HistoryReader, Inventory, ReadPlan,
    ReadStrategy, ReadSummary, SensorInventory, SensorSeries,
};
pub use records::{
    FileFormat, read_events, read_events_from, read_suspicions, read_suspicions_from, write_events,
    write_events_to, write_suspicions, write_suspicions_to,
};
pub use schema::{MAX_TS_MS, MIN_TS_MS};
pub use write::{HistoryWriter, HistoryWriterOptions};
