//! Configuration: the validated model (`model`) and loading/validation from a TOML directory
//! (`load`).

pub mod model;

pub use model::*;
