//! Configuration: the validated model (`model`) and loading/validation from a TOML directory
//! (`load`, with `service`, `export`, `http`, `smtp`, `reports`, `site`, `kinds`, `objects`,
//! `rules` and `trends` reading the tables through `de::table`: straight into the model type
//! where it keeps the keys as written, into a serde-derived raw struct where it is shaped
//! otherwise; arrays whose elements are located one by one through `reader`'s `Tbl::array`;
//! unknown keys are refused, old names named through `renamed`; every bound from `limits`); the
//! alerting model is in `alerting`; `locate` finds the database alone for the operator commands.

pub mod alerting;
mod de;
mod export;
pub mod heartbeat;
pub mod http;
mod kinds;
pub mod limits;
pub mod load;
mod locate;
pub mod model;
mod objects;
mod problem;
mod reader;
pub mod reloads;
mod renamed;
mod reports;
pub mod rules;
pub mod section_model;
mod service;
mod site;
mod smtp;
mod trends;

pub use alerting::{Alerting, Contacts, Policy, Rule, SiteAlerting, Smtp, SmtpSecurity};
pub use load::{load_dir, Problem, Problems};
pub use locate::database_path;
pub use model::*;
pub use smtp::is_loopback;
