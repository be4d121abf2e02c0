//! What a logger's message says, before anything knows about instruments: which subscription a
//! topic belongs to (`topic`) and what a payload holds (`decode`: JSON, SenML, CSV). Pure:
//! nothing here does I/O or reads the clock. Mapping readings to instruments, reducing them and
//! deciding flags belong to the engine; the MQTT adapter is `ingest`.

pub mod decode;
pub mod topic;
