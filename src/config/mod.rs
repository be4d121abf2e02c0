//! Configuration: the validated model (`model`) and loading/validation from a TOML directory
//! (`load`, with `service`, `export`, `site`, `kinds`, `objects`, `rules`, `smtp` and `trends`
//! reading the tables through `reader`, which refuses old names through `renamed`, every bound
//! from `limits`); the alerting model is in `alerting`; `locate` finds the database alone for
//! the operator commands.

pub mod alerting;
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
mod service;
mod site;
mod smtp;
mod trends;

pub use alerting::{Alerting, Contacts, Policy, Rule, SiteAlerting, Smtp, SmtpSecurity};
pub use load::{load_dir, summary, Problem, Problems};
pub use locate::database_path;
pub use model::*;
pub use smtp::is_loopback;
