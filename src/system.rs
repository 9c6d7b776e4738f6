//! The physical system, in internal units (energies in kT, lengths and times in the scenario's
//! units): what theory and simulation both need and nothing about how to run either. The
//! scenario module builds it; `theory`, `simulate` and `uncertainty` take it.
//!
//! Conventions (crate docs): m ẍ = −U'(x) − mγẋ + ξ(t), ⟨ξ(t)ξ(s)⟩ = 2mγkT δ(t−s), D = kT/(mγ);
//! with a memory time τ the friction kernel is γ(t) = (γ/τ) e^{−|t|/τ}.

use crate::potential::{AnyPotential, Diffusion};

/// A particle on a one-dimensional landscape with friction and noise tied by D = kT/(mγ).
#[derive(Debug, Clone)]
pub struct System {
    /// U(x)
    pub potential: AnyPotential,
    /// D(x) (length²/time)
    pub diffusion: Diffusion,
    /// mass (kT·time²/length²), when the dynamics can be inertial
    pub mass: Option<f64>,
    /// friction rate γ (1/time), when given or derivable as kT/(m D)
    pub friction: Option<f64>,
    /// memory time τ of an exponential friction kernel (time), when the friction is not memoryless
    pub memory_time: Option<f64>,
    /// period of a periodic landscape
    pub period: Option<f64>,
    /// where trajectories and the reactant well start (states.start)
    pub start: Option<f64>,
    /// the absorbing point (states.target)
    pub target: Option<f64>,
    /// the temperature in kelvin, when the scenario gives one (energies are already in kT; kept
    /// for the plausibility check)
    pub temperature_k: Option<f64>,
}
