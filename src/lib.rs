//! escapade: thermally activated barrier-crossing rates from a potential or free-energy profile.
//!
//! Data flow: scenario file (+ `--set`) → [`scenario::Model`] (validated, reduced to kT = 1 once
//! by [`units`]) → [`landscape::Landscape`] → [`theory::TheoryReport`] → [`report`] renderers,
//! which convert back to the scenario's units. Conventions: Langevin
//! m ẍ = −U'(x) − mγẋ + ξ(t), ⟨ξ(t)ξ(s)⟩ = 2mγkT δ(t−s), D = kT/(mγ); x_a the reactant minimum,
//! x_b the barrier top, E_b = U(x_b) − U(x_a), ω = sqrt(|U''|/m), δ = γ I_b / kT. The formulas
//! and their sources are cited in each module.

#![forbid(unsafe_code)]
#![warn(missing_docs)]

pub mod fit;
pub mod landscape;
pub mod model;
pub mod observe;
pub mod potential;
pub mod quad;
pub mod report;
pub mod scan;
pub mod scenario;
pub mod seed;
pub mod simulate;
pub mod stats;
pub mod system;
pub mod theory;
pub mod uncertainty;
pub mod units;

/// The scenario `escapade demo` runs (an invented reduced-units double well).
pub const DEMO_SCENARIO: &str = include_str!("demo.toml");
