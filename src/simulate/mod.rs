//! Simulated escape: ensembles of Langevin trajectories from the reactant minimum to the target,
//! with censoring at a horizon, seeded per trajectory so results depend on the seed alone.
//!
//! - [`Plan`] ([`plan`]): the validated run in internal units — dynamics, integrator, time step,
//!   horizon, trajectories, seed, start, forces and the method.
//! - [`execute`]: runs a set of trajectory indices on a rayon pool, streaming each finished
//!   outcome to a callback on the calling thread (records, progress), stopping cleanly on a flag.
//! - [`session`]: one whole simulation (the chosen method, the long-trajectory measurements, the
//!   record of the result) as the commands and scans run it.
//! - [`engine`] holds the inner loop and its integrators; [`force`] the fast forces; [`records`]
//!   the record files, resume and merge; [`methods`] the rare-event methods and the registry of
//!   methods; [`transitions`] and [`periodic`] the long-trajectory measurements.
//!
//! Nothing here knows the scenario file: a run is built from a [`System`], its [`Settings`] and
//! its analysis.

pub mod engine;
pub mod force;
pub mod methods;
pub mod periodic;
pub mod plan;
pub mod plane;
pub mod records;
pub mod session;
pub mod settings;
pub mod transitions;

use crate::stats::Outcome;
use crate::system::System;
use crate::theory::TheoryReport;
use force::{ConstD, FastForce};
pub use methods::flux::DEFAULT_FLUX_TRAJECTORIES;
pub use methods::{Context, Method, MethodRequest, RareResult, ffs, flux};
pub use plan::{Plan, fnv1a};
use serde::{Deserialize, Serialize};
pub use session::{SessionOptions, SessionResult, SimulationResult};
pub use settings::{Scheme, Settings, StartRule};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::mpsc;
use thiserror::Error;

/// Default time step: this fraction of the shortest period 2π/ω (underdamped).
pub const DT_PERIOD_FRACTION: f64 = 0.01;
/// Default time step: this fraction of the shortest relaxation time kT/(D|U''|) (overdamped).
pub const DT_RELAXATION_FRACTION: f64 = 0.02;
/// Underdamped default time step is also at most this over γ.
pub const DT_FRICTION: f64 = 0.2;
/// Default horizon, in expected escape times.
pub const HORIZON_ESCAPE_TIMES: f64 = 20.0;
/// A memory time below this fraction of dt is simulated as memoryless friction.
pub const MEMORY_NEGLIGIBLE: f64 = 1e-9;
/// Default ensemble size.
pub const DEFAULT_TRAJECTORIES: u64 = 1000;

/// Default step budget for `method = "auto"`: about 3–5 s on two cores at 3–5 ns per step.
pub const DEFAULT_BUDGET_STEPS: f64 = 1e9;
/// Brute force asked for explicitly is refused beyond this multiple of the budget.
pub const REFUSE_FACTOR: f64 = 10.0;
/// Worker threads are capped at this multiple of the available cores: more only adds scheduling
/// and memory (100 000 threads used to hang), and results do not depend on the count.
pub const THREADS_PER_CORE_CAP: usize = 4;

/// The worker threads to use for `requested` (0 = all cores), capped at
/// [`THREADS_PER_CORE_CAP`] × the available cores, with a warning when the cap applies.
pub fn effective_threads(requested: usize) -> (usize, Option<String>) {
    let cores = std::thread::available_parallelism().map_or(1, std::num::NonZero::get);
    let cap = THREADS_PER_CORE_CAP * cores;
    match requested {
        0 => (cores, None),
        n if n > cap => (
            cap,
            Some(format!(
                "--threads {n} is more than {THREADS_PER_CORE_CAP} x the {cores} available cores: using {cap} threads (results do not depend on the count)"
            )),
        ),
        n => (n, None),
    }
}

/// Simulation set-up problems.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum SimError {
    /// A value that cannot be used.
    #[error("{key}: {message}")]
    Key {
        /// the scenario key
        key: &'static str,
        /// what is wrong
        message: String,
    },
    /// Stopped by the user before a rare-event estimate was complete.
    #[error(
        "interrupted before the estimate was complete (rare-event methods keep no partial result)"
    )]
    Interrupted,
}

pub(crate) fn key_err(key: &'static str, message: impl Into<String>) -> SimError {
    SimError::Key {
        key,
        message: message.into(),
    }
}

/// Dynamics.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Dynamics {
    /// m ẍ = −U' − mγẋ + ξ
    Underdamped,
    /// ẋ = −D U'/kT + sqrt(2D) η
    Overdamped,
}

/// Runs the trajectories `indices` of `plan` on `threads` threads, calling `on_done` on this thread
/// for each finished one as it completes. Returns the outcomes in index order. When `stop` is set,
/// or `on_done` returns `false` (e.g. a record could not be written), the run ends early and only
/// finished trajectories are returned.
pub fn execute(
    plan: &Plan,
    indices: &[u64],
    threads: usize,
    stop: &AtomicBool,
    on_done: impl FnMut(&Outcome) -> bool,
) -> Vec<Outcome> {
    execute_with(
        indices,
        threads,
        stop,
        on_done,
        |idx, cursor, halt, send| {
            run_worker(plan, idx, cursor, halt, send);
        },
    )
}

/// As [`execute`], with the trajectories run by `worker` (one call per worker thread, sharing the
/// cursor into `indices`): the one thread pool, channel and stop handling of every ensemble, 1-D
/// ([`execute`]) or on a surface ([`plane::execute`]).
pub fn execute_with<W>(
    indices: &[u64],
    threads: usize,
    stop: &AtomicBool,
    mut on_done: impl FnMut(&Outcome) -> bool,
    worker: W,
) -> Vec<Outcome>
where
    W: Fn(&[u64], &AtomicUsize, &AtomicBool, &mut dyn FnMut(Outcome)) + Sync,
{
    // the workers watch `halt`: the caller's stop, or this thread's own decision to end
    let halt = AtomicBool::new(stop.load(Ordering::Relaxed));
    let workers = effective_threads(threads.max(1)).0;
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(workers)
        .build()
        .expect("a thread pool");
    let (tx, rx) = mpsc::channel::<Outcome>();
    let mut out = Vec::with_capacity(indices.len());
    let cursor = AtomicUsize::new(0);
    std::thread::scope(|s| {
        let cursor = &cursor;
        let halt = &halt;
        let worker = &worker;
        let running = s.spawn(move || {
            pool.scope(|sc| {
                for _ in 0..workers {
                    let tx = tx.clone();
                    sc.spawn(move |_| {
                        let mut send = |o: Outcome| {
                            let _ = tx.send(o);
                        };
                        worker(indices, cursor, halt, &mut send);
                    });
                }
            });
            drop(tx);
        });
        // Poll rather than block: a receiver asleep in recv() makes every send a futex wake-up
        // (12% of the run time in a profile of short trajectories). 2 ms keeps records timely.
        loop {
            let finished = running.is_finished();
            if stop.load(Ordering::Relaxed) {
                halt.store(true, Ordering::Relaxed);
            }
            while let Ok(o) = rx.try_recv() {
                if !on_done(&o) {
                    halt.store(true, Ordering::Relaxed);
                }
                out.push(o);
            }
            if finished {
                break;
            }
            std::thread::sleep(std::time::Duration::from_millis(2));
        }
        while let Ok(o) = rx.try_recv() {
            on_done(&o);
            out.push(o);
        }
    });
    out.sort_unstable();
    out
}

fn run_worker(
    plan: &Plan,
    indices: &[u64],
    cursor: &AtomicUsize,
    stop: &AtomicBool,
    send: &mut dyn FnMut(Outcome),
) {
    fn with<F: force::Force>(
        plan: &Plan,
        f: &F,
        indices: &[u64],
        cursor: &AtomicUsize,
        stop: &AtomicBool,
        send: &mut dyn FnMut(Outcome),
    ) {
        let p = &plan.params;
        match &plan.mobility {
            None => {
                let d = ConstD(plan.d_const);
                engine::run_chunk(p, f, &d, indices, cursor, stop, send)
            }
            Some(m) => engine::run_chunk(p, f, m, indices, cursor, stop, send),
        }
    }
    match &plan.force {
        FastForce::DoubleWell(f) => with(plan, f, indices, cursor, stop, send),
        FastForce::Cubic(f) => with(plan, f, indices, cursor, stop, send),
        FastForce::Washboard(f) => with(plan, f, indices, cursor, stop, send),
        FastForce::Grid(f) => with(plan, f, indices, cursor, stop, send),
    }
}

/// How to run an ensemble.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// worker threads (0 = all cores)
    pub threads: usize,
    /// run only part K (1-based) of N of the index range
    pub shard: Option<(u64, u64)>,
    /// append records to this file
    pub records: Option<std::path::PathBuf>,
    /// continue the run recorded in `records`
    pub resume: bool,
}

/// Parses `K/N` (1 ≤ K ≤ N).
///
/// # Errors
/// Anything else.
pub fn parse_shard(s: &str) -> Result<(u64, u64), String> {
    let (k, n) = s
        .split_once('/')
        .ok_or_else(|| format!("--shard {s}: expected K/N, e.g. 2/5"))?;
    let (k, n): (u64, u64) = (
        k.trim()
            .parse()
            .map_err(|_| format!("--shard {s}: K is not a whole number"))?,
        n.trim()
            .parse()
            .map_err(|_| format!("--shard {s}: N is not a whole number"))?,
    );
    if n == 0 || k == 0 || k > n {
        return Err(format!("--shard {s}: need 1 <= K <= N"));
    }
    Ok((k, n))
}

/// The index range of shard K of N over `total` trajectories: contiguous parts.
pub fn shard_range(total: u64, shard: Option<(u64, u64)>) -> std::ops::Range<u64> {
    match shard {
        None => 0..total,
        Some((k, n)) => {
            let part = |j: u64| ((u128::from(total) * u128::from(j)) / u128::from(n)) as u64;
            part(k - 1)..part(k)
        }
    }
}

/// The result of an ensemble run.
#[derive(Debug, Clone)]
pub struct RunResult {
    /// every outcome of this shard (including resumed ones), by index
    pub outcomes: Vec<Outcome>,
    /// trajectories this shard should have
    pub expected: u64,
    /// wall time of this invocation
    pub wall_seconds: f64,
    /// stopped by the flag before finishing
    pub interrupted: bool,
    /// resume and record notes
    pub warnings: Vec<String>,
    /// threads used
    pub threads: usize,
}

/// A run's record file, created or resumed (and locked), with what it already holds.
pub struct OpenRecords {
    writer: Option<records::Writer>,
    previous: Vec<Outcome>,
    warnings: Vec<String>,
}

/// Creates or resumes the record file of `opts` (nothing without one), so that a problem with it
/// is known before the run starts.
///
/// # Errors
/// Record-file problems (a directory, exists, in use, mismatched, malformed, unwritable).
pub fn open_records(plan: &Plan, opts: &RunOptions) -> Result<OpenRecords, records::RecordError> {
    Ok(match (&opts.records, opts.resume) {
        (Some(path), true) => {
            let (w, c) = records::resume(path, plan)?;
            OpenRecords {
                writer: Some(w),
                previous: c.outcomes,
                warnings: c.warnings,
            }
        }
        (Some(path), false) => OpenRecords {
            writer: Some(records::create(path, plan)?),
            previous: Vec::new(),
            warnings: Vec::new(),
        },
        (None, _) => OpenRecords {
            writer: None,
            previous: Vec::new(),
            warnings: Vec::new(),
        },
    })
}

/// Runs (or resumes) the ensemble of `plan` with records and sharding; `on_done` sees every newly
/// finished trajectory with the count finished so far (for progress displays).
///
/// # Errors
/// Record-file problems (exists, in use, mismatched, malformed, unwritable).
pub fn run_ensemble(
    plan: &Plan,
    opts: &RunOptions,
    stop: &AtomicBool,
    on_done: impl FnMut(&Outcome, usize),
) -> Result<RunResult, records::RecordError> {
    let open = open_records(plan, opts)?;
    run_opened(plan, opts, open, stop, on_done)
}

/// As [`run_ensemble`], with the record file already opened by [`open_records`].
///
/// # Errors
/// A record could not be written.
pub fn run_opened(
    plan: &Plan,
    opts: &RunOptions,
    open: OpenRecords,
    stop: &AtomicBool,
    mut on_done: impl FnMut(&Outcome, usize),
) -> Result<RunResult, records::RecordError> {
    let range = shard_range(plan.trajectories, opts.shard);
    let OpenRecords {
        mut writer,
        mut previous,
        warnings,
    } = open;
    previous.retain(|o| range.contains(&o.index));
    let done: std::collections::BTreeSet<u64> = previous.iter().map(|o| o.index).collect();
    let todo: Vec<u64> = range.clone().filter(|i| !done.contains(i)).collect();
    let threads = effective_threads(opts.threads).0;
    let t0 = std::time::Instant::now();
    let mut count = previous.len();
    let mut write_error = None;
    let fresh = execute(plan, &todo, threads, stop, |o| {
        count += 1;
        if let Some(w) = writer.as_mut()
            && write_error.is_none()
            && let Err(e) = w.append(o)
        {
            write_error = Some(e);
        }
        on_done(o, count);
        // a run whose records cannot be written ends at once rather than after all its work
        write_error.is_none()
    });
    if let Some(e) = write_error {
        return Err(e);
    }
    let wall_seconds = t0.elapsed().as_secs_f64();
    let interrupted = fresh.len() < todo.len();
    previous.extend(fresh);
    previous.sort_unstable();
    Ok(RunResult {
        outcomes: previous,
        expected: range.end - range.start,
        wall_seconds,
        interrupted,
        warnings,
        threads,
    })
}

/// Calls `$body` with `$f` bound to the plan's concrete force and `$m` to its mobility, so generic
/// code is monomorphised for each combination.
macro_rules! with_force {
    ($plan:expr, |$f:ident, $m:ident| $body:expr) => {{
        let plan = $plan;
        let cd = $crate::simulate::force::ConstD(plan.d_const);
        match (&plan.force, &plan.mobility) {
            ($crate::simulate::force::FastForce::DoubleWell($f), None) => {
                let $m = &cd;
                $body
            }
            ($crate::simulate::force::FastForce::Cubic($f), None) => {
                let $m = &cd;
                $body
            }
            ($crate::simulate::force::FastForce::Washboard($f), None) => {
                let $m = &cd;
                $body
            }
            ($crate::simulate::force::FastForce::Grid($f), None) => {
                let $m = &cd;
                $body
            }
            ($crate::simulate::force::FastForce::DoubleWell($f), Some($m)) => $body,
            ($crate::simulate::force::FastForce::Cubic($f), Some($m)) => $body,
            ($crate::simulate::force::FastForce::Washboard($f), Some($m)) => $body,
            ($crate::simulate::force::FastForce::Grid($f), Some($m)) => $body,
        }
    }};
}

pub(crate) use with_force;

/// Runs the plan's rare-event method (FFS or reactive flux, [`methods`]) on `threads` threads;
/// returns the estimate, the wall time and the threads used.
///
/// # Errors
/// The method's set-up errors (bad interfaces, a window beyond the budget), or an interruption.
pub fn run_rare(
    plan: &Plan,
    system: &System,
    t: &TheoryReport,
    threads: usize,
    stop: &AtomicBool,
) -> Result<(RareResult, f64, usize), SimError> {
    let (pool, threads) = pool_for(threads);
    let t0 = std::time::Instant::now();
    let ctx = Context {
        plan,
        system,
        theory: t,
        stop,
    };
    let res = pool.install(|| methods::run(&ctx))?;
    Ok((res, t0.elapsed().as_secs_f64(), threads))
}

/// A rayon pool of `threads` threads (0 = all cores; capped as [`effective_threads`]), and that
/// number.
fn pool_for(threads: usize) -> (rayon::ThreadPool, usize) {
    let threads = effective_threads(threads).0;
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("a thread pool");
    (pool, threads)
}

/// Runs the well-to-well transition count of [`transitions`] for a double well: the default
/// trajectory length makes about `simulation.transitions` (default 400) transitions expected from
/// the well-to-well theory rate (or the escape rate when that is missing). Returns the result and
/// the wall time.
///
/// # Errors
/// No product well, a run far beyond the step budget, or an interruption.
pub fn run_transitions(
    plan: &Plan,
    system: &System,
    t: &TheoryReport,
    threads: usize,
    stop: &AtomicBool,
) -> Result<(transitions::TransitionResult, f64), SimError> {
    let l = &t.landscape;
    let n = plan
        .settings
        .long_trajectories
        .unwrap_or(transitions::DEFAULT_TRANSITION_TRAJECTORIES);
    let k = t
        .rates
        .well_to_well
        .filter(|_| plan.dynamics == Dynamics::Underdamped)
        .or(match plan.dynamics {
            Dynamics::Underdamped => t.rates.turnover.or(t.rates.kramers),
            Dynamics::Overdamped => t.rates.mfpt,
        })
        .or(t.rates.mfpt)
        .unwrap_or(1.0);
    let wanted = plan
        .settings
        .transitions
        .map_or(transitions::DEFAULT_TRANSITIONS, |v| v as f64);
    let steps_f = (wanted / (n as f64 * k) / plan.params.dt).ceil().max(1.0);
    if steps_f * n as f64 > REFUSE_FACTOR * plan.budget_steps {
        return Err(key_err(
            "simulation.transitions",
            format!(
                "counting {wanted} well-to-well transitions needs about {:.2e} steps, more than {REFUSE_FACTOR}x simulation.budget_steps = {:.2e}: lower simulation.transitions or raise the budget",
                steps_f * n as f64,
                plan.budget_steps
            ),
        ));
    }
    let (pool, _) = pool_for(threads);
    let t0 = std::time::Instant::now();
    let r = pool.install(|| {
        with_force!(plan, |f, mb| transitions::run(
            plan,
            f,
            mb,
            &system.potential,
            l,
            n,
            steps_f as u64,
            stop
        ))
    })?;
    Ok((r, t0.elapsed().as_secs_f64()))
}

/// The size of a [`run_periodic`] run: (trajectories, recorded blocks, steps per block, total
/// steps). Blocks last [`periodic::BLOCK_TIMES`] / `rate`, `rate` the slowest rate of moving on by
/// one period (see [`run_periodic_for`]); `simulation.long_trajectories` (default 32) long
/// trajectories.
pub fn periodic_size(plan: &Plan, rate: f64) -> (u64, u64, u64, f64) {
    let n = plan
        .settings
        .long_trajectories
        .unwrap_or(periodic::DEFAULT_PERIODIC_TRAJECTORIES);
    let blocks = periodic::DEFAULT_BLOCKS;
    let block_steps = (periodic::BLOCK_TIMES / rate / plan.params.dt)
        .ceil()
        .clamp(1.0, 1e15);
    let total = block_steps * (blocks + 1) as f64 * n as f64;
    (n, blocks, block_steps as u64, total)
}

/// Runs the long-trajectory measurements of [`periodic`] (drift, effective diffusion, hopping
/// rates) for a periodic landscape: `minima` are the minima of one period (reactant first),
/// `origin` the start of the base period on which the force is known, `rate` the slowest rate of
/// moving on by one period (sets the block length, [`periodic_size`]). Returns the result and the
/// wall time.
///
/// # Errors
/// A run beyond [`REFUSE_FACTOR`] × the step budget, or an interruption.
#[allow(clippy::too_many_arguments)] // the run's full context
pub fn run_periodic(
    plan: &Plan,
    minima: &[f64],
    origin: f64,
    period: f64,
    rate: f64,
    threads: usize,
    stop: &AtomicBool,
) -> Result<(periodic::PeriodicSimResult, f64), SimError> {
    let (n, blocks, block_steps, total) = periodic_size(plan, rate);
    if total > REFUSE_FACTOR * plan.budget_steps {
        return Err(key_err(
            "simulation.budget_steps",
            format!(
                "measuring drift and diffusion needs about {total:.2e} steps ({n} trajectories × {} blocks of {block_steps} steps, a block being {} times the slowest time to move on by one period), more than {REFUSE_FACTOR}x simulation.budget_steps = {:.2e}: lower the barrier, use fewer trajectories or raise the budget",
                blocks + 1,
                periodic::BLOCK_TIMES,
                plan.budget_steps
            ),
        ));
    }
    let (pool, _) = pool_for(threads);
    let t0 = std::time::Instant::now();
    let r = pool.install(|| {
        with_force!(plan, |f, mb| {
            let fw = periodic::Wrapped::new(f, origin, period);
            let mw = periodic::Wrapped::new(mb, origin, period);
            periodic::run(plan, &fw, &mw, minima, period, n, blocks, block_steps, stop)
        })
    })?;
    Ok((r, t0.elapsed().as_secs_f64()))
}

/// The periodic measurements for an analysed periodic landscape (`t.periodic` with hopping):
/// the minima of one period, the base period's origin, and for the block length the slowest rate
/// of moving on by one period, min(k₊ + k₋, 2 D_eff/L²) (exact overdamped values; the second is
/// the slower one when a period holds several wells). `None` when the landscape is not periodic or
/// has no minimum (running state).
///
/// # Errors
/// As [`run_periodic`].
pub fn run_periodic_for(
    plan: &Plan,
    t: &TheoryReport,
    threads: usize,
    stop: &AtomicBool,
) -> Result<Option<(periodic::PeriodicSimResult, f64)>, SimError> {
    let Some(p) = &t.periodic else {
        return Ok(None);
    };
    let Some(h) = &p.hopping else {
        return Ok(None);
    };
    let rate = periodic_rate(t).unwrap_or(h.forward + h.backward);
    run_periodic(
        plan,
        &h.period_minima,
        p.origin,
        p.period,
        rate,
        threads,
        stop,
    )
    .map(Some)
}

/// The slowest rate of moving on by one period, min(k₊ + k₋, 2 D_eff/L²), from the exact
/// overdamped periodic theory (`None` without it).
pub fn periodic_rate(t: &TheoryReport) -> Option<f64> {
    let p = t.periodic.as_ref()?;
    let h = p.hopping.as_ref()?;
    let d_eff = p
        .effective_diffusion
        .unwrap_or(p.effective_diffusion_untilted);
    Some((h.forward + h.backward).min(2.0 * d_eff / (p.period * p.period)))
}
