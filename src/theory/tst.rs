//! Transition-state theory.
//!
//! - Harmonic TST: k = (ω_a/2π) e^{−E_b/kT} (Eyring, J. Chem. Phys. 3, 107 (1935); Wigner, Trans.
//!   Faraday Soc. 34, 29 (1938)).
//! - Exact 1-D TST (flux over population): k = sqrt(kT/(2πm)) e^{−U(x_b)/kT} / ∫ e^{−U/kT} dx, the
//!   integral over the reactant side from the reflecting wall to the barrier top (Hänggi, Talkner &
//!   Borkovec, Rev. Mod. Phys. 62, 251 (1990), Sec. II).

use crate::potential::Potential;
use crate::quad::{breakpoints, log_integral_exp};

/// Relative tolerance for the population integral (see [`crate::quad::converge`]).
pub const POPULATION_TOL: f64 = 1e-12;

/// ln of the harmonic TST rate.
pub fn ln_harmonic(omega_a: f64, eb: f64) -> f64 {
    (omega_a / (2.0 * std::f64::consts::PI)).ln() - eb
}

/// ln ∫ e^{−U} over the reactant side between `wall` and `barrier`.
pub fn ln_population(pot: &dyn Potential, wall: f64, barrier: f64, extra: &[f64]) -> f64 {
    let (lo, hi) = (wall.min(barrier), wall.max(barrier));
    let br = breakpoints(lo, hi, extra.iter().copied());
    log_integral_exp(&|x| -pot.u(x), &br, POPULATION_TOL).ln
}

/// ln of the exact 1-D TST rate.
pub fn ln_exact(pot: &dyn Potential, mass: f64, wall: f64, barrier: f64, extra: &[f64]) -> f64 {
    -0.5 * (2.0 * std::f64::consts::PI * mass).ln()
        - pot.u(barrier)
        - ln_population(pot, wall, barrier, extra)
}
