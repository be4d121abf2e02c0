//! Configuration: the validated model (`model`) and loading/validation from a TOML directory
//! (`load`, with `service`, `export`, `site` and `kinds` reading the tables through `reader`).

mod export;
mod kinds;
pub mod load;
pub mod model;
mod problem;
mod reader;
mod service;
mod site;

pub use load::{load_dir, summary, Problem, Problems};
pub use model::*;
