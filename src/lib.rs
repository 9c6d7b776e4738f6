//! escapade (work in progress)
pub mod potential;
pub mod units;
