//! Long trajectories on a periodic (possibly tilted) landscape: drift velocity, effective
//! diffusion coefficient and hopping rates between neighbouring minima, each with an interval.
//!
//! The trajectories run on the whole line (no walls; the force, and D(x), are wrapped into one
//! period). Each starts at the reactant minimum from its own stream, spends one block settling,
//! then records `blocks` blocks of `block_steps` steps:
//! - drift: each trajectory's displacement over the recorded window over its duration; the
//!   trajectories are independent, so the mean has a Student-t interval;
//! - effective diffusion: D_eff = Var(Δ)/(2 t_b) over the block displacements Δ (the long-time
//!   definition D_eff = lim Var x(t)/2t; Lifson & Jackson, J. Chem. Phys. 36, 2410 (1962) untilted).
//!   Blocks [`BLOCK_TIMES`] times the slowest time to move on by one period are nearly independent
//!   (the only correlation is the position inside a period at a block boundary), and the interval
//!   is the normal interval of a sample variance with the sample's own fourth moment,
//!   Var(s²) ≈ (m₄ − s⁴(N − 3)/(N − 1))/N (block displacements, sums of a few hops, are not
//!   Gaussian);
//! - hopping: a trajectory sits at a site (a minimum of the lattice of minima) until it reaches the
//!   position of a neighbouring site, which counts as a hop forward (+x) or backward. Rates out of
//!   reactant-type sites are hops over the time spent at them (competing exponential risks:
//!   k_± = N_±/T), with Poisson intervals.
//!
//! Counts and displacements are collected in trajectory order, so results depend on the seed only.

use super::engine::{self, Consts, State};
use super::force::{Force, Mobility};
use super::{Plan, SimError};
use crate::seed;
use rayon::prelude::*;
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, StudentsT};
use std::sync::atomic::{AtomicBool, Ordering};

/// z for a two-sided 95% interval.
const Z95: f64 = 1.959_963_984_540_054;
/// Default independent trajectories.
pub const DEFAULT_PERIODIC_TRAJECTORIES: u64 = 32;
/// Default recorded blocks per trajectory: 32 × 48 = 1536 block displacements give D_eff to
/// about ±7% (95%).
pub const DEFAULT_BLOCKS: u64 = 48;
/// Block length in units of the slowest time to move on by one period, max(1/(k₊ + k₋), L²/2D_eff).
/// Var(Δ) = 2 D_eff t_b + C, C from the position inside a period at the block ends (at most
/// ~L²/8 with two wells per period, ~kT/U'' with one): 4 such times make 2 D_eff t_b ≥ 4 L², so
/// C biases D_eff by at most ~3% (two wells) and negligibly with one.
pub const BLOCK_TIMES: f64 = 4.0;

/// A force on the whole line from one known on [x0, x0 + L): U' is periodic even when tilted.
#[derive(Debug, Clone, Copy)]
pub struct Wrapped<'a, T> {
    inner: &'a T,
    x0: f64,
    period: f64,
}

impl<'a, T> Wrapped<'a, T> {
    /// Wraps `inner` with period `period` from `x0`.
    pub fn new(inner: &'a T, x0: f64, period: f64) -> Self {
        Self { inner, x0, period }
    }
    #[inline(always)]
    fn fold(&self, x: f64) -> f64 {
        self.x0 + (x - self.x0).rem_euclid(self.period)
    }
}

impl<T: Force> Force for Wrapped<'_, T> {
    #[inline(always)]
    fn force(&self, x: f64) -> f64 {
        self.inner.force(self.fold(x))
    }
}

impl<T: Mobility> Mobility for Wrapped<'_, T> {
    const CONSTANT: bool = T::CONSTANT;
    #[inline(always)]
    fn d(&self, x: f64) -> (f64, f64) {
        self.inner.d(self.fold(x))
    }
}

/// Drift, effective diffusion and hopping rates from long trajectories.
#[derive(Debug, Clone, Serialize)]
pub struct PeriodicSimResult {
    /// trajectories
    pub trajectories: u64,
    /// recorded blocks per trajectory
    pub blocks: u64,
    /// block length (time units)
    pub block_time: f64,
    /// mean velocity (length per time)
    pub drift: f64,
    /// its 95% interval
    pub drift_ci95: [f64; 2],
    /// effective diffusion coefficient (length²/time)
    pub effective_diffusion: f64,
    /// its 95% interval
    pub effective_diffusion_ci95: [f64; 2],
    /// hops forward (+x) out of reactant-type sites
    pub hops_forward: u64,
    /// hops backward out of reactant-type sites
    pub hops_backward: u64,
    /// time spent at reactant-type sites
    pub time_at_reactant_sites: f64,
    /// forward hopping rate (per time unit)
    pub hop_forward: f64,
    /// its 95% interval
    pub hop_forward_ci95: [f64; 2],
    /// backward hopping rate
    pub hop_backward: f64,
    /// its 95% interval
    pub hop_backward_ci95: [f64; 2],
    /// steps spent
    pub total_steps: u64,
}

/// Per trajectory: displacement over the window, block displacements, hop counts, steps at
/// reactant-type sites.
struct Row {
    window: f64,
    blocks: Vec<f64>,
    fwd: u64,
    back: u64,
    at_reactant: u64,
}

/// Runs `n` trajectories of `blocks` + 1 blocks of `block_steps` steps on the whole line.
/// `minima` are the minima of one period, ascending, the reactant first (`minima[0]`), all in
/// `[minima[0], minima[0] + period)`.
#[allow(clippy::too_many_arguments)] // the run's full context
pub fn run<F: Force, M: Mobility>(
    plan: &Plan,
    force: &F,
    mob: &M,
    minima: &[f64],
    period: f64,
    n: u64,
    blocks: u64,
    block_steps: u64,
    stop: &AtomicBool,
) -> Result<PeriodicSimResult, SimError> {
    let mut p = plan.params.clone();
    p.lo = f64::NEG_INFINITY;
    p.hi = f64::INFINITY;
    let x_a = minima[0];
    let per = minima.len() as i64;
    // site s sits at minima[s mod k] + floor(s / k) L
    let site = |s: i64| minima[s.rem_euclid(per) as usize] + (s.div_euclid(per) as f64) * period;
    let c = Consts::new(&p, mob);
    let seed = seed::derive(p.seed, seed::PERIODIC);
    let rows: Vec<Row> = (0..n)
        .into_par_iter()
        .map(|j| {
            let mut rng = seed::stream(seed, j);
            let mut s = State::fresh(&p, force, x_a, &mut rng);
            let mut cur: i64 = 0;
            let (mut up, mut down) = (site(1), site(-1));
            let mut row = Row {
                window: 0.0,
                blocks: Vec::with_capacity(blocks as usize),
                fwd: 0,
                back: 0,
                at_reactant: 0,
            };
            let mut start = 0.0;
            let mut mark = 0.0;
            for b in 0..=blocks {
                if stop.load(Ordering::Relaxed) {
                    break;
                }
                for _ in 0..block_steps {
                    engine::step_state(&p, &c, force, mob, &mut s, &mut rng);
                    let home = cur.rem_euclid(per) == 0;
                    if b > 0 && home {
                        row.at_reactant += 1;
                    }
                    if s.x >= up || s.x <= down {
                        let forward = s.x >= up;
                        if b > 0 && home {
                            if forward {
                                row.fwd += 1;
                            } else {
                                row.back += 1;
                            }
                        }
                        // a long jump may pass several sites in one step; settle on the last
                        while s.x >= site(cur + 1) {
                            cur += 1;
                        }
                        while s.x <= site(cur - 1) {
                            cur -= 1;
                        }
                        up = site(cur + 1);
                        down = site(cur - 1);
                    }
                }
                if b == 0 {
                    start = s.x;
                } else {
                    row.blocks.push(s.x - mark);
                }
                mark = s.x;
            }
            row.window = s.x - start;
            row
        })
        .collect();
    if stop.load(Ordering::Relaxed) {
        return Err(SimError::Interrupted);
    }
    let tb = block_steps as f64 * p.dt;
    let t_window = blocks as f64 * tb;
    let nf = n as f64;
    // drift: independent trajectories, Student t
    let v: Vec<f64> = rows.iter().map(|r| r.window / t_window).collect();
    let vm = v.iter().sum::<f64>() / nf;
    let vs = (v.iter().map(|x| (x - vm).powi(2)).sum::<f64>() / (nf - 1.0).max(1.0)).sqrt();
    let tq = StudentsT::new(0.0, 1.0, (nf - 1.0).max(1.0))
        .map(|t| t.inverse_cdf(0.975))
        .unwrap_or(f64::INFINITY);
    let half = tq * vs / nf.sqrt();
    // effective diffusion: variance of all block displacements
    let all: Vec<f64> = rows.iter().flat_map(|r| r.blocks.iter().copied()).collect();
    let nb = all.len() as f64;
    let mean = all.iter().sum::<f64>() / nb;
    let var = all.iter().map(|d| (d - mean).powi(2)).sum::<f64>() / (nb - 1.0).max(1.0);
    let d_eff = var / (2.0 * tb);
    // interval of a variance with the sample's own fourth moment: block displacements are sums
    // of a few hops, not Gaussian, so the chi-square law would be too narrow
    let m4 = all.iter().map(|d| (d - mean).powi(4)).sum::<f64>() / nb;
    let var_of_var = ((m4 - var * var * (nb - 3.0) / (nb - 1.0)) / nb).max(0.0);
    let half_d = Z95 * var_of_var.sqrt() / (2.0 * tb);
    let d_ci = [(d_eff - half_d).max(0.0), d_eff + half_d];
    let fwd: u64 = rows.iter().map(|r| r.fwd).sum();
    let back: u64 = rows.iter().map(|r| r.back).sum();
    let at: u64 = rows.iter().map(|r| r.at_reactant).sum();
    let t_at = at as f64 * p.dt;
    let rate = |k: u64| if t_at > 0.0 { k as f64 / t_at } else { 0.0 };
    Ok(PeriodicSimResult {
        trajectories: n,
        blocks,
        block_time: tb,
        drift: vm,
        drift_ci95: [vm - half, vm + half],
        effective_diffusion: d_eff,
        effective_diffusion_ci95: d_ci,
        hops_forward: fwd,
        hops_backward: back,
        time_at_reactant_sites: t_at,
        hop_forward: rate(fwd),
        hop_forward_ci95: crate::stats::poisson_interval(fwd, t_at),
        hop_backward: rate(back),
        hop_backward_ci95: crate::stats::poisson_interval(back, t_at),
        total_steps: n * (blocks + 1) * block_steps,
    })
}
