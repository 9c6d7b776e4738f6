//! Analyses of observed trajectories: position-dependent diffusion (propagator likelihood,
//! conditional moments) and diffusion from umbrella windows.

pub mod propagator;
pub mod umbrella;
