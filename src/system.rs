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

use crate::potential::grid::GridSurface;
use crate::potential::surface::{DiffusionTensor, FormulaSurface, MullerBrown, Point, Surface};

/// The surface of a two-coordinate system: one of the three kinds a scenario can give.
#[derive(Debug, Clone)]
pub enum PlaneSurface {
    /// a formula f(x, y)
    Formula(FormulaSurface),
    /// a long-format grid table
    Grid(GridSurface),
    /// the Müller–Brown surface
    MullerBrown(MullerBrown),
}

impl PlaneSurface {
    /// The surface behind the one trait everything two-dimensional takes.
    pub fn surface(&self) -> &dyn Surface {
        match self {
            PlaneSurface::Formula(s) => s,
            PlaneSurface::Grid(s) => s,
            PlaneSurface::MullerBrown(s) => s,
        }
    }
}

/// A particle on a surface U(x, y) with a constant diffusion tensor D (kT = 1, so the friction
/// matrix is ζ = D⁻¹ and, with a mass matrix M, the friction-rate matrix is Γ = M⁻¹D⁻¹; for a
/// scalar friction rate γ and D = kT/(m_i γ) per coordinate, Γ = γ I).
#[derive(Debug, Clone)]
pub struct PlaneSystem {
    /// U(x, y)
    pub surface: PlaneSurface,
    /// D (length²/time)
    pub diffusion: DiffusionTensor,
    /// masses along x and y (kT·time²/length²), when the dynamics can be inertial
    pub mass: Option<[f64; 2]>,
    /// the friction rate γ (1/time) when the scenario gives it
    pub friction: Option<f64>,
    /// the reactant is the minimum this point descends to
    pub start: Option<Point>,
    /// the product is the minimum this point descends to
    pub target: Option<Point>,
    /// the radius of a disk around the product minimum taken as the product region (default:
    /// the rule of `theory::plane`)
    pub product_radius: Option<f64>,
    /// the temperature in kelvin, when the scenario gives one
    pub temperature_k: Option<f64>,
}
