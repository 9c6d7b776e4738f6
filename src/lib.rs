//! escapade (work in progress)
pub mod landscape;
pub mod potential;
pub mod quad;
pub mod scenario;
pub mod theory;
pub mod units;
