//! Ingest adapters' pure core: which subscription a topic belongs to and what a payload says.
//!
//! Owns topic-pattern matching (`topic`) and payload decoding (`decode`). Nothing here does I/O,
//! reads the clock or knows about instruments: mapping readings to instruments, reducing them
//! and deciding flags belong to the engine.

pub mod decode;
pub mod link;
pub mod mqtt;
pub mod progress;
pub mod topic;
pub mod writer;
