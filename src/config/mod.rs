//! Configuration: the validated model (`model`) and loading/validation from a TOML directory
//! (`load`, with `service`, `site`, `kinds`, `objects` and `trends` reading the tables through
//! `reader`).

mod kinds;
pub mod load;
pub mod model;
mod objects;
mod problem;
mod reader;
mod service;
mod site;
mod trends;

pub use load::{load_dir, summary, Problem, Problems};
pub use model::*;
