//! Reading and writing telltale's files.

pub mod read;
mod schema;
pub mod write;

pub use read::{
    AssetHistory, AssetIndex, AssetInventory, BadFile, HistoryReader, Inventory, ReadPlan,
    ReadStrategy, ReadSummary, SensorInventory, SensorSeries,
};
pub use schema::{MAX_TS_MS, MIN_TS_MS};
pub use write::{HistoryWriter, HistoryWriterOptions};
