//! Live ingestion from the broker: the MQTT network task (`mqtt`), the writer thread that
//! commits batches and acknowledges them (`writer`), the broker link state (`link`) and the
//! progress counters (`progress`). The pure payload decoders are `crate::payload`.

pub mod link;
pub mod mqtt;
pub mod progress;
pub mod writer;

// Older paths of the decoders (the fuzz targets and tests use them).
pub use crate::payload::{decode, topic};
