//! seepd: watches seepage under and through earth dams and levees.
//!
//! Layers (see DEVELOPERS.md): `domain` is pure engineering (no I/O, no clock); `engine` turns
//! an incoming message into stored rows by calling the domain and is shared by `run` and
//! `replay`; `ingest`, `store` and `demo` are adapters; `cli` parses arguments.

pub mod ack_token;
pub mod alerts;
pub mod background;
pub mod backoff;
pub mod calibrate_cmd;
pub mod check_cmd;
pub mod cli;
pub mod command;
pub mod config;
#[cfg(feature = "demo-broker")]
pub mod demo;
pub mod derive;
pub mod domain;
pub mod engine;
pub mod export;
pub mod fit_cmd;
pub mod flownet_cmd;
pub mod heartbeat;
pub mod ingest;
pub mod manual;
pub mod model;
pub mod notify;
pub mod objkind;
pub mod payload;
pub mod plot_cmd;
pub mod present;
pub mod quality;
pub mod reduce;
pub mod reload;
pub mod replay;
pub mod scenario;
pub mod sdnotify;
pub mod section_cmd;
pub mod section_svg;
pub mod seepage;
pub mod seepage_worker;
pub mod service;
pub mod shutdown;
pub mod status;
pub mod store;
pub mod testpoint;
pub mod timetext;

/// The caution every alert email and report carries.
pub const CAUTION: &str =
    "Automated screening only. Verify conditions in the field before acting; \
follow the emergency action plan, local regulations and the direction of the engineer of record. \
A quiet report is not evidence of a safe structure.";
pub mod report;
pub mod watch;
pub mod web;
