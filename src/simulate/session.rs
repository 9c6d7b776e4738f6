//! One simulation as a command or a scan point runs it: the plan's method (brute force with
//! records, shards and resume, or a rare-event method), then the long-trajectory measurements that
//! apply (the well-to-well count when asked for, drift, diffusion and hopping on a periodic
//! landscape when they fit the step budget), gathered into one [`SimulationResult`].
//!
//! The caller builds the [`Plan`] (so that its errors come first), then calls [`run`]; an
//! [`Observer`] sees each phase as it starts and every finished brute-force trajectory (notes and
//! progress bars are the caller's). A stop request ends the run cleanly: a brute-force ensemble
//! keeps its finished trajectories (`interrupted` set), a rare-event method has no partial result
//! ([`SimError::Interrupted`]).

use super::methods::{MethodDetails, RareResult};
use super::records::RecordError;
use super::{Dynamics, periodic::PeriodicSimResult, transitions::TransitionResult};
use super::{
    Method, Plan, RunOptions, RunResult, SimError, effective_threads, open_records, periodic_rate,
    periodic_size, run_opened, run_periodic_for, run_rare, run_transitions, shard_range,
};
use crate::stats::Outcome;
use crate::system::System;
use crate::theory::TheoryReport;
use serde::Serialize;
use std::path::PathBuf;
use std::sync::atomic::AtomicBool;
use thiserror::Error;

/// The record of one simulation (JSON key "simulation"): rates and times are in the scenario's
/// units already (internal units differ from them in energies only).
#[derive(Debug, Clone, Serialize)]
pub struct SimulationResult {
    /// "brute-force" | "ffs" | "reactive-flux"
    pub method: &'static str,
    /// why this method (the auto choice and its cost estimate)
    pub method_reason: String,
    /// dynamics
    pub dynamics: Dynamics,
    /// integrator
    pub scheme: &'static str,
    /// trajectories of this run or shard (brute force, reactive flux); trials in all (FFS)
    pub trajectories: u64,
    /// finished so far (less than trajectories after an interruption)
    pub finished: u64,
    /// escaped (brute force)
    pub escaped: Option<u64>,
    /// censored at max_time (brute force)
    pub censored: Option<u64>,
    /// the simulated rate, per time unit
    pub rate: f64,
    /// its 95% interval
    pub rate_ci95: [f64; 2],
    /// how the interval was made
    pub rate_ci_method: &'static str,
    /// mean first-passage time of the escaped trajectories (brute force)
    pub mfpt: Option<f64>,
    /// its standard error
    pub mfpt_se: Option<f64>,
    /// median first-passage time
    pub median: Option<f64>,
    /// coefficient of variation of the first-passage times
    pub cv: Option<f64>,
    /// Kolmogorov–Smirnov distance to the fitted exponential
    pub ks_distance: Option<f64>,
    /// its p-value
    pub ks_p_value: Option<f64>,
    /// steps spent
    pub total_steps: u64,
    /// wall time of this invocation
    pub wall_seconds: f64,
    /// time step
    pub dt: f64,
    /// the landscape's default time step
    pub dt_default: f64,
    /// horizon (brute force)
    pub max_time: Option<f64>,
    /// master seed
    pub seed: u64,
    /// threads used
    pub threads: usize,
    /// relative interpolation error of the tabulated force (0 for closed-form families)
    pub force_rel_error: f64,
    /// expected brute-force cost in steps
    pub expected_brute_force_steps: f64,
    /// the step budget for the automatic choice
    pub budget_steps: f64,
    /// "K/N" when sharded
    pub shard: Option<String>,
    /// stopped by Ctrl-C
    pub interrupted: bool,
    /// each rare-event method's own result (JSON: `ffs`, `reactive_flux`; null unless it ran)
    #[serde(flatten)]
    pub details: MethodDetails,
    /// well-to-well transitions counted in long trajectories (simulation.well_to_well = true)
    pub well_to_well: Option<TransitionResult>,
    /// periodic landscapes: drift, effective diffusion and hopping rates from long trajectories
    pub periodic: Option<PeriodicSimResult>,
    /// warnings
    pub warnings: Vec<String>,
}

impl SimulationResult {
    fn base(plan: &Plan, wall_seconds: f64, threads: usize) -> Self {
        Self {
            method: plan.method.as_str(),
            method_reason: plan.method_reason.clone(),
            dynamics: plan.dynamics,
            scheme: plan.scheme,
            trajectories: 0,
            finished: 0,
            escaped: None,
            censored: None,
            rate: 0.0,
            rate_ci95: [0.0, f64::INFINITY],
            rate_ci_method: "",
            mfpt: None,
            mfpt_se: None,
            median: None,
            cv: None,
            ks_distance: None,
            ks_p_value: None,
            total_steps: 0,
            wall_seconds,
            dt: plan.params.dt,
            dt_default: plan.dt_default,
            max_time: None,
            seed: plan.params.seed,
            threads,
            force_rel_error: plan.force.rel_error(),
            expected_brute_force_steps: plan.expected_brute_steps,
            budget_steps: plan.budget_steps,
            shard: None,
            interrupted: false,
            details: MethodDetails::default(),
            well_to_well: None,
            periodic: None,
            warnings: plan.warnings.clone(),
        }
    }

    /// From a brute-force run.
    pub fn brute_force(plan: &Plan, run: &RunResult, shard: Option<(u64, u64)>) -> Self {
        let s = crate::stats::summarise(&run.outcomes, plan.params.dt, plan.params.max_steps);
        let mut out = Self::base(plan, run.wall_seconds, run.threads);
        out.warnings.extend(run.warnings.iter().cloned());
        out.warnings.extend(s.warnings.iter().cloned());
        if s.censored > 0 {
            out.warnings.push(
                "the rate interval is the Poisson (chi-square) interval: approximate under censoring".into(),
            );
        }
        if run.interrupted {
            out.warnings.push(format!(
                "interrupted: {} of {} trajectories finished; the numbers are those of the finished ones, biased towards short first-passage times (resume with --resume to complete the run)",
                run.outcomes.len(),
                run.expected
            ));
        }
        out.method = Method::BruteForce.as_str();
        out.trajectories = run.expected;
        out.finished = run.outcomes.len() as u64;
        out.escaped = Some(s.escaped);
        out.censored = Some(s.censored);
        out.rate = s.rate;
        out.rate_ci95 = s.rate_ci95;
        out.rate_ci_method = "chi-square (Poisson count in the total observed time)";
        out.mfpt = s.mfpt;
        out.mfpt_se = s.mfpt_se;
        out.median = s.median;
        out.cv = s.cv;
        out.ks_distance = s.ks_distance;
        out.ks_p_value = s.ks_p_value;
        out.total_steps = s.total_steps;
        out.max_time = Some(plan.max_time());
        out.shard = shard.map(|(k, n)| format!("{k}/{n}"));
        out.interrupted = run.interrupted;
        out
    }

    /// From a rare-event estimate.
    pub fn rare(plan: &Plan, r: RareResult, wall_seconds: f64, threads: usize) -> Self {
        let mut out = Self::base(plan, wall_seconds, threads);
        let s = r.summary();
        out.trajectories = s.trajectories;
        out.finished = s.trajectories;
        out.rate = s.rate;
        out.rate_ci95 = s.rate_ci95;
        out.rate_ci_method = s.rate_ci_method;
        out.total_steps = s.total_steps;
        out.warnings.extend(s.warnings);
        r.store(&mut out.details);
        out
    }
}

/// How to run a session.
#[derive(Debug, Clone, Default)]
pub struct SessionOptions {
    /// worker threads (0 = all cores; capped as [`effective_threads`], with a warning)
    pub threads: usize,
    /// run only part K (1-based) of N of a brute-force ensemble (no long-trajectory measurements)
    pub shard: Option<(u64, u64)>,
    /// append brute-force records to this file
    pub records: Option<PathBuf>,
    /// continue the run recorded in `records`
    pub resume: bool,
}

/// A phase of the session, announced as it starts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Phase {
    /// the brute-force ensemble of this many trajectories (this shard's), its record file open
    BruteForce {
        /// trajectories to run in this invocation's range
        trajectories: u64,
    },
    /// the plan's rare-event method
    Rare,
    /// the well-to-well count in long trajectories
    WellToWell,
    /// drift, diffusion and hopping in long trajectories (periodic landscapes)
    Periodic,
}

/// What the caller sees while a session runs (all on the calling thread).
pub trait Observer {
    /// A phase starts.
    fn phase(&mut self, _plan: &Plan, _phase: Phase) {}
    /// A brute-force trajectory finished; `done` counts the finished ones so far.
    fn finished(&mut self, _outcome: &Outcome, _done: usize) {}
}

/// No notes, no progress.
impl Observer for () {}

/// A finished (or stopped) session.
#[derive(Debug, Clone)]
pub struct SessionResult {
    /// the record of the simulation
    pub simulation: SimulationResult,
    /// brute force: every outcome of this shard (resumed ones included), by index
    pub outcomes: Vec<Outcome>,
    /// stopped before everything finished
    pub interrupted: bool,
    /// why the well-to-well count asked for did not run (it was over the budget, or the
    /// landscape has no product well); the escape results stand
    pub well_to_well_error: Option<String>,
}

/// Session problems.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum SessionError {
    /// A record file (a directory, exists, in use, mismatched, malformed, unwritable).
    #[error(transparent)]
    Records(#[from] RecordError),
    /// Records or shards asked for a method that has none.
    #[error("--records, --resume and --shard apply to brute-force runs; simulation.method is {0}")]
    NotBruteForce(&'static str),
    /// A set-up error of a method or a measurement, or a stop before a rare-event estimate was
    /// complete ([`SimError::Interrupted`]).
    #[error(transparent)]
    Sim(#[from] SimError),
}

/// Runs the simulation of `plan` for `system` (analysed as `theory`).
///
/// # Errors
/// See [`SessionError`].
pub fn run(
    plan: &Plan,
    system: &System,
    theory: &TheoryReport,
    opts: &SessionOptions,
    stop: &AtomicBool,
    observer: &mut dyn Observer,
) -> Result<SessionResult, SessionError> {
    let (threads, thread_warning) = effective_threads(opts.threads);
    let (mut simulation, outcomes, interrupted) = if plan.method == Method::BruteForce {
        let run = brute_force(plan, opts, threads, stop, observer)?;
        (
            SimulationResult::brute_force(plan, &run, opts.shard),
            run.outcomes,
            run.interrupted,
        )
    } else {
        if opts.records.is_some() || opts.shard.is_some() {
            return Err(SessionError::NotBruteForce(plan.method.as_str()));
        }
        observer.phase(plan, Phase::Rare);
        let (r, wall, threads) = run_rare(plan, system, theory, threads, stop)?;
        (
            SimulationResult::rare(plan, r, wall, threads),
            Vec::new(),
            false,
        )
    };
    simulation.warnings.extend(thread_warning);
    let mut result = SessionResult {
        simulation,
        outcomes,
        interrupted,
        well_to_well_error: None,
    };
    if opts.shard.is_some() {
        if plan.settings.well_to_well == Some(true) || theory.periodic.is_some() {
            result.simulation.warnings.push(
                "the long-trajectory measurements (well-to-well count; periodic drift, diffusion and hopping) are not split into shards: run them without --shard".into(),
            );
        }
    } else if !result.interrupted {
        long_runs(plan, system, theory, threads, stop, observer, &mut result)?;
    }
    Ok(result)
}

/// The brute-force ensemble with records, shard and resume (record-file problems come before
/// anything runs).
fn brute_force(
    plan: &Plan,
    opts: &SessionOptions,
    threads: usize,
    stop: &AtomicBool,
    observer: &mut dyn Observer,
) -> Result<RunResult, SessionError> {
    let ropts = RunOptions {
        threads,
        shard: opts.shard,
        records: opts.records.clone(),
        resume: opts.resume,
    };
    let open = open_records(plan, &ropts)?;
    let trajectories = shard_range(plan.trajectories, opts.shard).count() as u64;
    observer.phase(plan, Phase::BruteForce { trajectories });
    Ok(run_opened(plan, &ropts, open, stop, |o, n| {
        observer.finished(o, n);
    })?)
}

/// The long-trajectory measurements after the escape run: the well-to-well count (when asked
/// for; a set-up error leaves a warning) and, for periodic landscapes, drift, diffusion and
/// hopping (when the cost fits the budget, else a warning). Their steps and wall time add to the
/// record's.
fn long_runs(
    plan: &Plan,
    system: &System,
    theory: &TheoryReport,
    threads: usize,
    stop: &AtomicBool,
    observer: &mut dyn Observer,
    result: &mut SessionResult,
) -> Result<(), SessionError> {
    let out = &mut result.simulation;
    if plan.settings.well_to_well == Some(true) {
        observer.phase(plan, Phase::WellToWell);
        match run_transitions(plan, system, theory, threads, stop) {
            Ok((w, wall)) => {
                out.total_steps += w.total_steps;
                out.wall_seconds += wall;
                out.well_to_well = Some(w);
            }
            Err(SimError::Interrupted) => result.interrupted = true,
            // too long for the budget: the escape results still stand
            Err(e) => {
                out.warnings
                    .push(format!("well-to-well count not run: {e}"));
                result.well_to_well_error = Some(e.to_string());
            }
        }
    }
    let hopping = theory.periodic.as_ref().and_then(|p| p.hopping.as_ref());
    if !result.interrupted
        && let Some(h) = hopping
    {
        let rate = periodic_rate(theory).unwrap_or(h.forward + h.backward);
        let (_, _, _, steps) = periodic_size(plan, rate);
        if steps > plan.budget_steps {
            out.warnings.push(format!(
                "periodic landscape: measuring drift and diffusion would take about {steps:.2e} steps, over simulation.budget_steps = {:.2e}; raise the budget to run it",
                plan.budget_steps
            ));
        } else {
            observer.phase(plan, Phase::Periodic);
            match run_periodic_for(plan, theory, threads, stop) {
                Ok(Some((p, wall))) => {
                    out.total_steps += p.total_steps;
                    out.wall_seconds += wall;
                    out.periodic = Some(p);
                }
                Ok(None) => {}
                Err(SimError::Interrupted) => result.interrupted = true,
                Err(e) => return Err(e.into()),
            }
        }
    }
    Ok(())
}
