//! Well-to-well transitions of a double well, counted in long trajectories (the simulated
//! counterpart of Mel'nikov's well-to-well rate, Phys. Rep. 209, 1 (1991), which differs from the
//! escape rate at weak friction because a particle that has just crossed still carries the barrier
//! energy and may cross back).
//!
//! States ("cores"): the reactant core A is the set of points on the reactant side of the barrier
//! top whose energy E = U(x) + m v²/2 (underdamped) or E = U(x) (overdamped) lies at least
//! `margin` below U(x_b); the product core B likewise on the product side. The margin is
//! min([`CORE_MARGIN_KT`], half the well's depth below the barrier top). A particle that has
//! sunk that far below the barrier energy returns over it before relaxing with probability of
//! about e^{−margin} in energy diffusion (and far less at strong friction), so core-to-core
//! passages are committed transitions. Each trajectory remembers the last core it visited; a
//! transition A → B is counted on entering B with A as the last core (and B → A likewise). The
//! rate out of A is the number of A → B transitions over the time spent with A as the last core
//! (Northrup & Hynes, J. Chem. Phys. 73, 2700 (1980) for stable-states rates; Vanden-Eijnden,
//! Transition path theory, for the "last visited" bookkeeping), with the Poisson (chi-square)
//! 95% interval of [`crate::stats::poisson_interval`].
//!
//! Every trajectory starts at the reactant minimum (last core A) from its own stream, runs a fixed
//! number of steps and reports integer counts, so the sums depend on the seed alone.

use super::engine::{self, Consts, State};
use super::force::{Force, Mobility};
use super::{Plan, SimError};
use crate::landscape::Landscape;
use crate::potential::Potential;
use crate::seed;
use rayon::prelude::*;
use serde::Serialize;
use std::sync::atomic::{AtomicBool, Ordering};

/// Core depth below the barrier energy (kT): a return over the barrier from there is an
/// e^{-3} ≈ 5% event in energy diffusion.
pub const CORE_MARGIN_KT: f64 = 3.0;
/// Default number of independent long trajectories.
pub const DEFAULT_TRANSITION_TRAJECTORIES: u64 = 32;
/// Default number of expected transitions over all trajectories, both directions: about 400 out
/// of each well of a symmetric double well, a 10% relative 95% half-width on each rate.
pub const DEFAULT_TRANSITIONS: f64 = 800.0;

/// The counted transitions and the rates they give.
#[derive(Debug, Clone, Serialize)]
pub struct TransitionResult {
    /// the state definition, in words
    pub rule: String,
    /// reactant core: energies up to this (kT above U(x_a))
    pub core_reactant_energy: f64,
    /// product core: energies up to this (kT above U(x_a))
    pub core_product_energy: f64,
    /// independent trajectories
    pub trajectories: u64,
    /// length of each trajectory (time units)
    pub time_per_trajectory: f64,
    /// reactant → product transitions
    pub forward: u64,
    /// product → reactant transitions
    pub backward: u64,
    /// time with the reactant core as the last visited
    pub time_reactant: f64,
    /// time with the product core as the last visited
    pub time_product: f64,
    /// well-to-well rate out of the reactant well (per time unit)
    pub rate: f64,
    /// its 95% interval
    pub rate_ci95: [f64; 2],
    /// well-to-well rate out of the product well
    pub rate_back: f64,
    /// its 95% interval
    pub rate_back_ci95: [f64; 2],
    /// steps spent
    pub total_steps: u64,
}

/// The connected interval around `x0` where `u < level`, searched outwards on a grid of `n`
/// points between `a` and `b` and refined by bisection.
fn basin(pot: &dyn Potential, x0: f64, level: f64, a: f64, b: f64) -> (f64, f64) {
    let edge = |towards: f64| {
        let n = 4096;
        let mut inside = x0;
        for i in 1..=n {
            let x = x0 + (towards - x0) * f64::from(i) / f64::from(n);
            if pot.u(x) >= level {
                let (mut lo, mut hi) = (inside, x);
                for _ in 0..60 {
                    let mid = 0.5 * (lo + hi);
                    if pot.u(mid) < level {
                        lo = mid;
                    } else {
                        hi = mid;
                    }
                }
                return lo;
            }
            inside = x;
        }
        towards
    };
    let (l, r) = (edge(a.min(b)), edge(a.max(b)));
    (l, r)
}

/// One core: an interval and an energy ceiling.
#[derive(Debug, Clone, Copy)]
struct Core {
    lo: f64,
    hi: f64,
    level: f64,
}

impl Core {
    #[inline]
    fn holds(&self, pot: &dyn Potential, s: &State, half_m: f64) -> bool {
        // the cheap interval test first; U only inside it
        s.x >= self.lo && s.x <= self.hi && pot.u(s.x) + half_m * s.v * s.v <= self.level
    }
}

/// Counts well-to-well transitions in `n` trajectories of `steps` steps each.
///
/// # Errors
/// No product well, cores that cannot be formed, or an interruption.
#[allow(clippy::too_many_arguments)] // the run's full context
pub fn run<F: Force, M: Mobility>(
    plan: &Plan,
    force: &F,
    mob: &M,
    pot: &dyn Potential,
    l: &Landscape,
    n: u64,
    steps: u64,
    stop: &AtomicBool,
) -> Result<TransitionResult, SimError> {
    let p = &plan.params;
    let product = l.product.ok_or_else(|| {
        super::key_err(
            "simulation.well_to_well",
            "no product well: a metastable well has only an escape rate",
        )
    })?;
    let u_p = l.u_product.unwrap_or(l.u_barrier);
    let margin_a = CORE_MARGIN_KT.min(0.5 * l.barrier_height);
    let margin_b = CORE_MARGIN_KT.min(0.5 * (l.u_barrier - u_p));
    if margin_b <= 0.0 {
        return Err(super::key_err(
            "simulation.well_to_well",
            "the product well is not below the barrier top",
        ));
    }
    let (dlo, dhi) = (p.lo, p.hi);
    let far = |d: f64| if d > 0.0 { dhi } else { dlo };
    let ca = {
        let level = l.u_barrier - margin_a;
        let (a, b) = basin(pot, l.reactant, level, l.barrier, far(-l.direction));
        Core {
            lo: a,
            hi: b,
            level,
        }
    };
    let cb = {
        let level = l.u_barrier - margin_b;
        let (a, b) = basin(pot, product, level, l.barrier, far(l.direction));
        Core {
            lo: a,
            hi: b,
            level,
        }
    };
    let c = Consts::new(p, mob);
    let half_m = if p.kind.underdamped() {
        0.5 * p.mass
    } else {
        0.0
    };
    let seed = seed::derive(p.seed, seed::TRANSITIONS);
    // per trajectory: (A→B, B→A, steps last in A, steps last in B)
    let rows: Vec<(u64, u64, u64, u64)> = (0..n)
        .into_par_iter()
        .map(|j| {
            let mut rng = seed::stream(seed, j);
            let mut s = State::fresh(p, force, l.reactant, &mut rng);
            let (mut fwd, mut back, mut in_a, mut in_b) = (0u64, 0u64, 0u64, 0u64);
            let mut last_a = true;
            for k in 0..steps {
                if k % 65_536 == 0 && stop.load(Ordering::Relaxed) {
                    break;
                }
                engine::step_state(p, &c, force, mob, &mut s, &mut rng);
                if last_a {
                    in_a += 1;
                    if cb.holds(pot, &s, half_m) {
                        fwd += 1;
                        last_a = false;
                    }
                } else {
                    in_b += 1;
                    if ca.holds(pot, &s, half_m) {
                        back += 1;
                        last_a = true;
                    }
                }
            }
            (fwd, back, in_a, in_b)
        })
        .collect();
    if stop.load(Ordering::Relaxed) {
        return Err(SimError::Interrupted);
    }
    let sum = |f: fn(&(u64, u64, u64, u64)) -> u64| rows.iter().map(f).sum::<u64>();
    let (fwd, back, sa, sb) = (sum(|r| r.0), sum(|r| r.1), sum(|r| r.2), sum(|r| r.3));
    let (ta, tb) = (sa as f64 * p.dt, sb as f64 * p.dt);
    let rate = |k: u64, t: f64| if t > 0.0 { k as f64 / t } else { 0.0 };
    Ok(TransitionResult {
        rule: format!(
            "cores: energy at least {margin_a:.3} kT (reactant) and {margin_b:.3} kT (product) below the barrier top, on each side of it; a transition is counted on entering one core when the other was the last visited"
        ),
        core_reactant_energy: ca.level - l.u_reactant,
        core_product_energy: cb.level - l.u_reactant,
        trajectories: n,
        time_per_trajectory: steps as f64 * p.dt,
        forward: fwd,
        backward: back,
        time_reactant: ta,
        time_product: tb,
        rate: rate(fwd, ta),
        rate_ci95: crate::stats::poisson_interval(fwd, ta),
        rate_back: rate(back, tb),
        rate_back_ci95: crate::stats::poisson_interval(back, tb),
        total_steps: n * steps,
    })
}
