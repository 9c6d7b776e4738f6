//! Forward flux sampling (Allen, Warren & ten Wolde, Phys. Rev. Lett. 94, 018104 (2005); Allen,
//! Frenkel & ten Wolde, J. Chem. Phys. 124, 024102 (2006); review Allen, Valeriani & ten Wolde,
//! J. Phys.: Condens. Matter 21, 463102 (2009)).
//!
//! Interfaces λ_0 < … < λ_n along λ = dir·x from the reactant well to the target. A basin run gives
//! the flux Φ_0 of first crossings of λ_0 after leaving the reactant state A (λ ≤ λ_A, the reactant
//! minimum) and stores the crossing states; trials fired from stored states at λ_i estimate
//! P(λ_{i+1} | λ_i) (success: reach λ_{i+1}; failure: fall back into A). Then k = Φ_0 Π_i P_i.
//!
//! Interfaces are placed automatically from the overdamped committor estimate
//! P(λ_{i+1}|λ_i) ≈ I(λ_i)/I(λ_{i+1}), I(λ) = ∫_{x_a}^{λ} e^{U/kT}/D (exact for overdamped 1-D
//! dynamics, a guide otherwise), so that each stage succeeds with probability about 1/4; the first
//! interface sits where U has risen min(2 kT, E_b/3) above the minimum. Users may give their own.
//! The number of trials per stage follows from the simple variance estimate
//! Var(k)/k² ≈ Σ_i (1 − p_i)/(p_i M_i) (Allen, Frenkel & ten Wolde 2006) for a target relative
//! error. The 95% interval comes from independent replicas (Student t over their rates): the
//! published single-run estimate misses the spread of success probability over starting points, so
//! replicas are the safe error bar (Allen, Valeriani & ten Wolde 2009, Sec. 4).
//!
//! Every basin walker and trial has its own PCG stream from (seed, replica, stage, index), and
//! trials run in parallel but are collected in index order: the result depends on the seed only.

use super::{Context, RareSummary};
use crate::landscape::Landscape;
use crate::potential::{Diffusion, Potential};
use crate::quad::log_add;
use crate::seed;
use crate::simulate::engine::{self, Consts, Exit, State};
use crate::simulate::force::{Force, Mobility};
use crate::simulate::{Plan, SimError, key_err, with_force};
use rand::RngExt;
use rayon::prelude::*;
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, StudentsT};
use std::sync::atomic::{AtomicBool, Ordering};

/// Independent replicas for the interval.
pub const REPLICAS: usize = 10;
/// Default target relative standard error of the rate.
pub const TARGET_REL_ERROR: f64 = 0.012;
/// Planned success probability per stage.
pub const STAGE_PROBABILITY: f64 = 0.25;
/// Basin walkers per replica.
const BASIN_WALKERS: usize = 16;
/// Planned stage probability for user-given interfaces (unknown in advance).
const STAGE_GUESS: f64 = 0.2;
/// A trial that neither succeeds nor falls back within this many steps counts as a failure
/// (and is reported).
const TRIAL_LIMIT: u64 = 100_000_000;

/// One stage, pooled over replicas.
#[derive(Debug, Clone, Serialize)]
pub struct Stage {
    /// interface the trials start from (position)
    pub from: f64,
    /// interface they aim for
    pub to: f64,
    /// trials fired
    pub trials: u64,
    /// trials that reached `to`
    pub successes: u64,
    /// successes / trials
    pub probability: f64,
}

/// An FFS estimate.
#[derive(Debug, Clone, Serialize)]
pub struct FfsResult {
    /// mean rate over replicas (per time unit)
    pub rate: f64,
    /// 95% interval (Student t over replicas)
    pub rate_ci95: [f64; 2],
    /// how the interval was made
    pub interval_method: &'static str,
    /// each replica's rate
    pub replica_rates: Vec<f64>,
    /// flux through the first interface (per time unit), pooled
    pub flux: f64,
    /// interface positions λ_0 … λ_n (the last is the target)
    pub interfaces: Vec<f64>,
    /// whether the interfaces were placed automatically
    pub interfaces_automatic: bool,
    /// stages pooled over replicas
    pub stages: Vec<Stage>,
    /// trials per stage per replica
    pub trials_per_stage: u64,
    /// steps spent (basin runs and trials)
    pub total_steps: u64,
    /// warnings
    pub warnings: Vec<String>,
}

impl FfsResult {
    /// The part every method's record shows.
    pub fn summary(&self) -> RareSummary {
        let trials = self.stages.iter().map(|s| s.trials).sum();
        RareSummary {
            trajectories: trials,
            rate: self.rate,
            rate_ci95: self.rate_ci95,
            rate_ci_method: self.interval_method,
            total_steps: self.total_steps,
            warnings: self.warnings.clone(),
        }
    }
}

/// Forward flux sampling for a plan: the interfaces given in `simulation.interfaces` (checked,
/// the target appended) or placed automatically, and the trials per stage for
/// [`TARGET_REL_ERROR`] unless `simulation.trials` is given.
///
/// # Errors
/// Interfaces out of order or outside the reactant–target range, or an interruption.
pub fn run_for(ctx: &Context<'_>) -> Result<FfsResult, SimError> {
    let plan = ctx.plan;
    let l = &ctx.theory.landscape;
    let replicas = plan.settings.replicas.map_or(REPLICAS, |r| r as usize);
    let (ifs, automatic, probs) = match &plan.settings.interfaces {
        Some(given) => {
            let mut v = given.clone();
            let d = l.direction;
            let ok = v.windows(2).all(|w| d * w[1] > d * w[0])
                && d * v[0] > d * l.reactant
                && d * v[v.len() - 1] <= d * l.target;
            if !ok {
                return Err(key_err(
                    "simulation.interfaces",
                    format!(
                        "must increase from the reactant (x = {}) towards the target (x = {}), beyond the reactant and not beyond the target",
                        l.reactant, l.target
                    ),
                ));
            }
            if d * v[v.len() - 1] < d * l.target {
                v.push(l.target);
            }
            let n = v.len() - 1;
            (v, false, vec![STAGE_GUESS; n])
        }
        None => {
            let (v, p) = place_interfaces(&ctx.system.potential, &ctx.system.diffusion, l);
            (v, true, p)
        }
    };
    let trials = plan
        .settings
        .trials
        .unwrap_or_else(|| trials_for(&probs, TARGET_REL_ERROR, replicas));
    with_force!(plan, |f, mb| run(
        plan, f, mb, l, &ifs, automatic, trials, replicas, ctx.stop
    ))
}

fn tag(seed: u64, replica: u64, stage: u64) -> u64 {
    seed::derive(
        seed,
        seed::splitmix64(seed::FFS ^ (replica << 32) ^ stage.wrapping_mul(0x9e37)),
    )
}

/// Automatic interfaces (positions from the reactant towards the target, the target last) and the
/// planned stage probabilities.
pub fn place_interfaces(
    pot: &dyn Potential,
    diff: &Diffusion,
    l: &Landscape,
) -> (Vec<f64>, Vec<f64>) {
    let (xa, b) = (l.reactant, l.target);
    let g = 4000;
    let xs: Vec<f64> = (0..=g)
        .map(|i| xa + (b - xa) * f64::from(i) / f64::from(g))
        .collect();
    let ua = pot.u(xa);
    let rise = (l.barrier_height / 3.0).min(2.0);
    // ln I(x) = ln ∫_{x_a}^{x} e^{U}/D by the trapezoid rule in log space
    let mut ln_i = vec![f64::NEG_INFINITY; xs.len()];
    let h = ((b - xa) / f64::from(g)).abs();
    let w = |x: f64| pot.u(x) - diff.value(x).ln();
    for k in 1..xs.len() {
        let cell = log_add(w(xs[k - 1]), w(xs[k])) + (0.5 * h).ln();
        ln_i[k] = log_add(ln_i[k - 1], cell);
    }
    let start = xs
        .iter()
        .position(|&x| pot.u(x) - ua >= rise)
        .unwrap_or(1)
        .max(1);
    let mut out = vec![xs[start]];
    let mut probs = Vec::new();
    let step = -STAGE_PROBABILITY.ln();
    let mut last = start;
    let end = xs.len() - 1;
    while last < end {
        let want = ln_i[last] + step;
        let next = (last + 1..=end).find(|&k| ln_i[k] >= want).unwrap_or(end);
        // a final stage with success probability above 0.8 is merged into the target stage
        let next = if ln_i[end] - ln_i[next] < 0.8f64.ln().abs() {
            end
        } else {
            next
        };
        probs.push((ln_i[last] - ln_i[next]).exp());
        out.push(xs[next]);
        last = next;
    }
    (out, probs)
}

/// Trials per stage per replica for a target relative error, from the planned probabilities.
pub fn trials_for(probs: &[f64], rel_error: f64, replicas: usize) -> u64 {
    let var: f64 = probs.iter().map(|p| (1.0 - p) / p.max(1e-6)).sum();
    let total = (1.3 * var / (rel_error * rel_error)).ceil();
    ((total / replicas as f64).ceil() as u64).clamp(200, 200_000)
}

/// Runs FFS for `plan` with the interfaces given (positions, the target last).
#[allow(clippy::too_many_arguments)] // the run's full context
pub fn run<F: Force, M: Mobility>(
    plan: &Plan,
    force: &F,
    mob: &M,
    l: &Landscape,
    interfaces: &[f64],
    automatic: bool,
    trials: u64,
    replicas: usize,
    stop: &AtomicBool,
) -> Result<FfsResult, SimError> {
    let p = &plan.params;
    let c = Consts::new(p, mob);
    let dir = p.dir;
    let lambda_a = dir * l.reactant;
    let lams: Vec<f64> = interfaces.iter().map(|x| dir * x).collect();
    let n_stages = lams.len() - 1;
    let mut warnings = Vec::new();
    let mut replica_rates = Vec::with_capacity(replicas);
    let mut stages: Vec<Stage> = (0..n_stages)
        .map(|i| Stage {
            from: interfaces[i],
            to: interfaces[i + 1],
            trials: 0,
            successes: 0,
            probability: 0.0,
        })
        .collect();
    let mut total_steps = 0u64;
    let mut flux_crossings = 0u64;
    let mut flux_steps = 0u64;
    let mut limited = 0u64;
    let per_walker = (trials as usize).div_ceil(BASIN_WALKERS).max(8);
    for rep in 0..replicas as u64 {
        if stop.load(Ordering::Relaxed) {
            return Err(SimError::Interrupted);
        }
        // basin runs
        let t0 = tag(p.seed, rep, 0);
        let basin: Vec<(Vec<State>, u64)> = (0..BASIN_WALKERS as u64)
            .into_par_iter()
            .map(|w| {
                let mut rng = seed::stream(t0, w);
                engine::run_basin(
                    p,
                    &c,
                    force,
                    mob,
                    l.reactant,
                    &mut rng,
                    lambda_a,
                    lams[0],
                    per_walker,
                    u64::MAX,
                )
            })
            .collect();
        let steps: u64 = basin.iter().map(|b| b.1).sum();
        let mut pool: Vec<State> = basin.into_iter().flat_map(|b| b.0).collect();
        total_steps += steps;
        flux_steps += steps;
        flux_crossings += pool.len() as u64;
        let flux = pool.len() as f64 / (steps as f64 * p.dt);
        let mut k = flux;
        for (i, stage) in stages.iter_mut().enumerate() {
            if stop.load(Ordering::Relaxed) {
                return Err(SimError::Interrupted);
            }
            let ti = tag(p.seed, rep, i as u64 + 1);
            let upper = lams[i + 1];
            let from = &pool;
            let results: Vec<(Option<State>, u64, bool)> = (0..trials)
                .into_par_iter()
                .map(|j| {
                    let mut rng = seed::stream(ti, j);
                    let mut s = from[rng.random_range(0..from.len())];
                    let (exit, n) = engine::run_between(
                        p,
                        &c,
                        force,
                        mob,
                        &mut s,
                        &mut rng,
                        lambda_a,
                        upper,
                        TRIAL_LIMIT,
                    );
                    ((exit == Exit::Upper).then_some(s), n, exit == Exit::Limit)
                })
                .collect();
            let succ: Vec<State> = results.iter().filter_map(|r| r.0).collect();
            total_steps += results.iter().map(|r| r.1).sum::<u64>();
            limited += results.iter().filter(|r| r.2).count() as u64;
            stage.trials += trials;
            stage.successes += succ.len() as u64;
            k *= succ.len() as f64 / trials as f64;
            if succ.is_empty() {
                warnings.push(format!(
                    "replica {rep}: no trial reached the interface at {}: the replica's rate is 0; add interfaces or trials",
                    interfaces[i + 1]
                ));
                break;
            }
            pool = succ;
        }
        replica_rates.push(k);
    }
    for s in &mut stages {
        s.probability = s.successes as f64 / s.trials.max(1) as f64;
    }
    if limited > 0 {
        warnings.push(format!(
            "{limited} trials hit the {TRIAL_LIMIT}-step limit and were counted as failures"
        ));
    }
    let r = replica_rates.len() as f64;
    let mean = replica_rates.iter().sum::<f64>() / r;
    let var = replica_rates
        .iter()
        .map(|k| (k - mean).powi(2))
        .sum::<f64>()
        / (r - 1.0).max(1.0);
    let tq = StudentsT::new(0.0, 1.0, (r - 1.0).max(1.0))
        .map(|t| t.inverse_cdf(0.975))
        .unwrap_or(12.71);
    let half = tq * (var / r).sqrt();
    Ok(FfsResult {
        rate: mean,
        rate_ci95: [(mean - half).max(0.0), mean + half],
        interval_method: "Student t over independent FFS replicas",
        replica_rates,
        flux: flux_crossings as f64 / (flux_steps as f64 * p.dt),
        interfaces: interfaces.to_vec(),
        interfaces_automatic: automatic,
        stages,
        trials_per_stage: trials,
        total_steps,
        warnings,
    })
}
