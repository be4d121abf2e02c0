//! The fault suite: seepd under the faults an operator meets, each scenario bounded in time and
//! asserting the guarantee it stands for. Every scenario writes its figures to
//! `target/tmp/fault-figures/SCENARIO.txt` (the README "Guarantees" table quotes the latest run).
//!
//! | module | scenario |
//! |---|---|
//! | `kill9` | kill -9 × 20 at random moments during 10,000 QoS 1 readings |
//! | `broker` | the broker stopped and restarted, with its store kept and with it emptied |
//! | `relay` | the mail relay down, then back, refusing one recipient |
//! | `export` | the InfluxDB-compatible server (VictoriaMetrics) down mid-stream |
//! | `payloads` | 2,000 malformed payloads of 40+ kinds among 2,000 valid ones |
//! | `config` | 1,000+ random edits of the example configuration |
//! | `disk` | the database on a full filesystem |
//! | `sigterm` | SIGTERM with the broker down, the disk full, mid-commit and mid-email |

#[path = "../common/mod.rs"]
mod common;

mod support;

mod broker;
mod config;
mod disk;
mod export;
mod kill9;
mod payloads;
mod relay;
mod sigterm;
