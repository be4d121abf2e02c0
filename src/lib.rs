//! seepd: watches seepage under and through earth dams and levees.
//!
//! Layers (see DEVELOPERS.md): `domain` is pure engineering (no I/O, no clock); `engine` turns
//! an incoming message into stored rows by calling the domain and is shared by `run` and
//! `replay`; `ingest`, `store` and `demo` are adapters; `cli` parses arguments.

pub mod cli;
pub mod config;
#[cfg(feature = "demo-broker")]
pub mod demo;
pub mod derive;
pub mod domain;
pub mod engine;
pub mod fit_cmd;
pub mod ingest;
pub mod quality;
pub mod replay;
pub mod section_cmd;
pub mod service;
pub mod store;
pub mod watch;
