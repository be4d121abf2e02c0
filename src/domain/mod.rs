//! The engineering core: pure functions, no I/O, no clock reads (time is a parameter).
//!
//! Everything of engineering substance lives here and is unit-tested against published values
//! (see README "Sources of formulas").

pub mod blanket;
pub mod gradient;
pub mod health;
pub mod hst;
pub mod lsq;
pub mod response;
pub mod rules;
pub mod section;
pub mod section_svg;
pub mod toe;
pub mod trend;
pub mod units;

#[cfg(test)]
mod testutil;
