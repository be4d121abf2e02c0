//! The engineering core: pure functions, no I/O, no clock reads (time is a parameter).
//!
//! Everything of engineering substance lives here and is unit-tested against published values
//! (see README "Sources of formulas").

pub mod blanket;
pub mod gradient;
pub mod reduce;
pub mod section;
pub mod section_svg;
pub mod toe;
pub mod units;

#[cfg(test)]
mod testutil;
