//! Simulated escape: ensembles of Langevin trajectories from the reactant minimum to the target,
//! with censoring at a horizon, seeded per trajectory so results depend on the seed alone.
//!
//! - [`Plan`]: the validated run in internal units — dynamics (default: underdamped when a mass and
//!   a friction are known and γ/ω_b < 5, or with memory friction; else overdamped), integrator
//!   (BAOAB, its memory variant for the generalised Langevin equation, or an overdamped scheme), time step (default: 1% of the
//!   shortest period 2π/ω and at most 0.2/γ, or 2% of the shortest overdamped relaxation time
//!   kT/(D|U''|), at the reactant well and the barrier), horizon (default 20 expected escape times, so censoring
//!   costs e^{-20} of the rate), trajectories, seed, start.
//! - [`execute`]: runs a set of trajectory indices on a rayon pool, streaming each finished
//!   outcome to a callback on the calling thread (records, progress), stopping cleanly on a flag.
//! - [`engine`] holds the inner loop and its integrators; [`force`] the fast forces; [`records`]
//!   the record files, resume and merge.

pub mod engine;
pub mod ffs;
pub mod flux;
pub mod force;
pub mod periodic;
pub mod records;
pub mod settings;
pub mod transitions;

use crate::potential::AnyPotential;
use crate::potential::{Diffusion, Potential};
use crate::scenario::Model;
use crate::stats::Outcome;
use crate::theory::TheoryReport;
use engine::{Kind, Params, Start};
use force::{ConstD, FastForce, GridD};
use serde::{Deserialize, Serialize};
pub use settings::{MethodRequest, Scheme, Settings, StartRule};
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
/// Default reactive-flux ensemble.
pub const DEFAULT_FLUX_TRAJECTORIES: u64 = 20_000;
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

/// A number whose natural logarithm is `ln`, as `d.dde±x`, also beyond the range of f64.
fn sci_from_ln(ln: f64) -> String {
    let l10 = ln / std::f64::consts::LN_10;
    let e = l10.floor();
    format!("{:.2}e{e}", 10f64.powf(l10 - e))
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

/// The simulation method.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Method {
    /// plain escape ensembles
    BruteForce,
    /// forward flux sampling
    Ffs,
    /// Bennett–Chandler reactive flux
    ReactiveFlux,
}

impl Method {
    /// The name as in scenario files.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::BruteForce => "brute-force",
            Self::Ffs => "ffs",
            Self::ReactiveFlux => "reactive-flux",
        }
    }
}

fn key_err(key: &'static str, message: impl Into<String>) -> SimError {
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

/// A validated simulation plan (internal units).
#[derive(Debug, Clone)]
pub struct Plan {
    /// dynamics
    pub dynamics: Dynamics,
    /// integrator name as reported
    pub scheme: &'static str,
    /// loop parameters
    pub params: Params,
    /// ensemble size
    pub trajectories: u64,
    /// the default dt for this landscape
    pub dt_default: f64,
    /// true when the user set dt
    pub dt_given: bool,
    /// force and mobility for the loop
    pub force: FastForce,
    /// D(x) tabulated, if it varies
    pub mobility: Option<GridD>,
    /// constant D (overdamped)
    pub d_const: f64,
    /// notes and warnings for the report
    pub warnings: Vec<String>,
    /// fingerprint of everything that determines the outcomes
    pub fingerprint: u64,
    /// the method that will run
    pub method: Method,
    /// why that method
    pub method_reason: String,
    /// step budget
    pub budget_steps: f64,
    /// expected brute-force cost in steps (ensemble × expected escape time / dt)
    pub expected_brute_steps: f64,
    /// the `[simulation]` section as given
    pub section: Settings,
    /// the scenario's time unit name ("1" reduced), for record files
    pub time_unit: String,
}

/// FNV-1a, 64 bit: a stable fingerprint (not a cryptographic hash).
pub fn fnv1a(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    h
}

impl Plan {
    /// Builds the plan from a model and its theory (for the landscape, defaults and horizon).
    ///
    /// # Errors
    /// Underdamped dynamics without mass or friction, a scheme that does not fit the dynamics, or
    /// memory friction with explicit overdamped dynamics.
    pub fn new(m: &Model, t: &TheoryReport) -> Result<Self, SimError> {
        let s = m.simulation.clone().unwrap_or_default();
        let memory = m.system.memory_time;
        let l = &t.landscape;
        let dynamics = match s.dynamics {
            Some(Dynamics::Underdamped) => Dynamics::Underdamped,
            // the generalised Langevin equation is inertial: its embedding has no overdamped form
            Some(_) if memory.is_some() => {
                return Err(key_err(
                    "simulation.dynamics",
                    "memory friction (particle.memory_time) needs underdamped dynamics: drop dynamics = \"overdamped\" or memory_time",
                ));
            }
            Some(_) => Dynamics::Overdamped,
            None if memory.is_some() => Dynamics::Underdamped,
            // inertia matters below γ/ω_b = 5; above, the overdamped limit holds (to 4%) and is
            // far cheaper to integrate correctly
            None if m.system.mass.is_some()
                && t.friction.is_some()
                && t.regime
                    .gamma_over_omega_barrier
                    .is_some_and(|g| g < crate::theory::regime::GAMMA_OVERDAMPED) =>
            {
                Dynamics::Underdamped
            }
            None => Dynamics::Overdamped,
        };
        let (kind, scheme) = match (dynamics, s.scheme) {
            (Dynamics::Underdamped, None | Some(Scheme::Baoab | Scheme::BaoabMemory))
                if memory.is_some() =>
            {
                (Kind::BaoabMemory, "baoab-memory")
            }
            (Dynamics::Underdamped, Some(Scheme::BaoabMemory)) => {
                return Err(key_err(
                    "simulation.scheme",
                    "\"baoab-memory\" needs particle.memory_time; memoryless friction uses \"baoab\"",
                ));
            }
            (Dynamics::Underdamped, None | Some(Scheme::Baoab)) => (Kind::Baoab, "baoab"),
            (Dynamics::Underdamped, Some(other)) => {
                return Err(key_err(
                    "simulation.scheme",
                    format!(
                        "{:?} is an overdamped scheme; underdamped dynamics uses \"baoab\"",
                        other.name()
                    ),
                ));
            }
            (Dynamics::Overdamped, None | Some(Scheme::LeimkuhlerMatthews)) => {
                (Kind::LeimkuhlerMatthews, "leimkuhler-matthews")
            }
            (Dynamics::Overdamped, Some(Scheme::EulerMaruyama)) => {
                (Kind::EulerMaruyama, "euler-maruyama")
            }
            (Dynamics::Overdamped, Some(other)) => {
                return Err(key_err(
                    "simulation.scheme",
                    format!(
                        "{:?} is an underdamped scheme; overdamped dynamics uses \"leimkuhler-matthews\" or \"euler-maruyama\"",
                        other.name()
                    ),
                ));
            }
        };
        let (mass, gamma) = match dynamics {
            Dynamics::Underdamped => (
                m.system
                    .mass
                    .ok_or_else(|| key_err("particle.mass", "underdamped dynamics needs a mass"))?,
                t.friction.ok_or_else(|| {
                    key_err("particle.friction", "underdamped dynamics needs a friction")
                })?,
            ),
            Dynamics::Overdamped => (1.0, 0.0),
        };
        let (lo, hi) = m.system.potential.domain();
        let d_a = m.system.diffusion.value(l.reactant);
        let d_b = m.system.diffusion.value(l.barrier);
        // the landscape's shortest time scale, and the default dt from it
        let (t_scale, t_scale_name, dt_default) = match dynamics {
            Dynamics::Underdamped => {
                let w = (l.curvature_reactant.max(l.curvature_barrier) / mass).sqrt();
                let period = 2.0 * std::f64::consts::PI / w;
                // and γ dt ≤ 0.2: with γ dt ≫ 1 BAOAB still samples the right distribution but its
                // diffusion in x no longer follows D = kT/(mγ), so rates would be wrong. With
                // memory the same bound holds (the τ → 0 limit is BAOAB) and none is needed on τ:
                // the O-step propagates the stiff (v, z) block exactly for any τ/dt
                (
                    period.min(1.0 / gamma),
                    "the shorter of the period 2π/ω and 1/γ",
                    (DT_PERIOD_FRACTION * period).min(DT_FRICTION / gamma),
                )
            }
            Dynamics::Overdamped => {
                let tau =
                    (1.0 / (d_a * l.curvature_reactant)).min(1.0 / (d_b * l.curvature_barrier));
                (
                    tau,
                    "the relaxation time kT/(D U'')",
                    DT_RELAXATION_FRACTION * tau,
                )
            }
        };
        let mut warnings = Vec::new();
        let dt = s.dt.unwrap_or(dt_default);
        let trajectories = s.trajectories.unwrap_or(DEFAULT_TRAJECTORIES);
        let budget_steps = s.budget_steps.unwrap_or(DEFAULT_BUDGET_STEPS);
        // every method runs each trajectory (or trial) for at least about one such time; forward
        // flux sampling has no step budget of its own, so a dt far below it would crawl for ever
        // (logarithms: t/dt can exceed the range of f64)
        let ln_least = (t_scale.ln() - dt.ln()).max(0.0);
        let ln_total = ln_least + (trajectories as f64).ln();
        if ln_total > (REFUSE_FACTOR * budget_steps).ln() {
            return Err(key_err(
                "simulation.dt",
                format!(
                    "{dt:.3e} is far below this landscape's shortest time scale {t_scale:.3e} ({t_scale_name}): crossing it once takes about {} steps per trajectory, {} for {trajectories} trajectories, more than {REFUSE_FACTOR}x simulation.budget_steps = {budget_steps:.2e}; the default dt here is {dt_default:.3e}",
                    sci_from_ln(ln_least),
                    sci_from_ln(ln_total)
                ),
            ));
        }
        if s.dt.is_some() && dt > dt_default {
            warnings.push(format!(
                "simulation.dt = {dt:.4e} is larger than the default {dt_default:.4e} for this landscape: expect a time-step bias in the rate (first passages are checked once per step)"
            ));
        }
        // expected escape rate: the trusted theory for these dynamics
        let k_expect = match dynamics {
            Dynamics::Underdamped if memory.is_some() => {
                t.rates.grote_hynes.or(t.rates.turnover).or(t.rates.kramers)
            }
            Dynamics::Underdamped => t.rates.turnover.or(t.rates.kramers),
            Dynamics::Overdamped => t.rates.mfpt,
        }
        .or(t.rates.mfpt)
        .unwrap_or(1.0);
        // the default horizon is capped at 1e15 steps (beyond any brute-force run; FFS and
        // reactive flux ignore it), so barriers of hundreds of kT still give a usable plan
        let max_time = s
            .max_time
            .unwrap_or((HORIZON_ESCAPE_TIMES / k_expect).min(1e15 * dt));
        // round, not ceil: max_time = n·dt must give n steps despite rounding in the division
        let max_steps_f = (max_time / dt).round();
        if !(1.0..1e18).contains(&max_steps_f) {
            return Err(key_err(
                "simulation.max_time",
                format!("max_time / dt = {max_steps_f:e} steps is not a usable horizon"),
            ));
        }
        let max_steps = max_steps_f as u64;
        let start = match s.start {
            Some(StartRule::Thermal) => {
                Start::Thermal(thermal_table(&m.system.potential, l.wall, l.barrier))
            }
            _ => Start::At(l.reactant),
        };
        let force = FastForce::new(&m.system.potential);
        if force.rel_error() > 1e-6 {
            warnings.push(format!(
                "the tabulated force has a relative interpolation error of {:.1e}",
                force.rel_error()
            ));
        }
        let mobility = match (&m.system.diffusion, dynamics) {
            (Diffusion::Constant(_), _) | (_, Dynamics::Underdamped) => None,
            (d, Dynamics::Overdamped) => Some(GridD::new(d, lo, hi)),
        };
        // a memory far shorter than the step is memoryless friction to O(τ/dt); the memory
        // variable's spread sqrt(mγ/τ) would otherwise leave floating point
        let (kind, scheme) = match memory {
            Some(tau) if kind == Kind::BaoabMemory && tau < MEMORY_NEGLIGIBLE * dt => {
                warnings.push(format!(
                    "memory_time = {tau:.3e} is below {MEMORY_NEGLIGIBLE:.0e} dt: simulated as memoryless friction (relative error of order tau/dt)"
                ));
                (Kind::Baoab, "baoab")
            }
            _ => (kind, scheme),
        };
        let params = Params {
            kind,
            dt,
            max_steps,
            seed: s.seed.unwrap_or(1),
            target: l.target,
            dir: l.direction,
            lo,
            hi,
            mass,
            gamma,
            memory_time: memory.unwrap_or(0.0),
            start,
        };
        let fingerprint = fingerprint(m, &params, trajectories);
        // a trajectory lasts the expected escape time, or the horizon when that is shorter
        let escape_time = 1.0 / k_expect;
        let per_trajectory = escape_time.min(max_steps as f64 * dt);
        let expected_brute_steps = trajectories as f64 * per_trajectory / dt;
        let cost = format!(
            "expected brute-force cost {expected_brute_steps:.2e} steps ({trajectories} trajectories × {per_trajectory:.3e} per trajectory / dt {dt:.3e}; T = {}) against simulation.budget_steps = {budget_steps:.2e}",
            if per_trajectory < escape_time {
                format!(
                    "the horizon max_time, shorter than the expected escape time {escape_time:.3e}"
                )
            } else {
                "the expected escape time".to_string()
            }
        );
        let (method, method_reason) = match s.method {
            Some(MethodRequest::BruteForce) => {
                if expected_brute_steps > REFUSE_FACTOR * budget_steps {
                    return Err(key_err(
                        "simulation.method",
                        format!(
                            "brute force refused: {cost}, more than {REFUSE_FACTOR}x over; use simulation.method = \"ffs\" (forward flux sampling) or raise budget_steps"
                        ),
                    ));
                }
                (Method::BruteForce, "requested".to_string())
            }
            Some(MethodRequest::Ffs) => (Method::Ffs, "requested".to_string()),
            Some(MethodRequest::ReactiveFlux) => {
                if dynamics != Dynamics::Underdamped {
                    return Err(key_err(
                        "simulation.method",
                        "reactive flux needs underdamped dynamics (a mass and a friction)",
                    ));
                }
                (Method::ReactiveFlux, "requested".to_string())
            }
            None | Some(MethodRequest::Auto) => {
                if expected_brute_steps <= budget_steps {
                    (Method::BruteForce, format!("auto: {cost}"))
                } else {
                    (
                        Method::Ffs,
                        format!("auto: {cost}; forward flux sampling instead"),
                    )
                }
            }
        };
        Ok(Self {
            dynamics,
            scheme,
            params,
            trajectories,
            dt_default,
            dt_given: s.dt.is_some(),
            force,
            mobility,
            d_const: d_a,
            warnings,
            fingerprint,
            method,
            method_reason,
            budget_steps,
            expected_brute_steps,
            section: s,
            time_unit: m.units.names.time.clone(),
        })
    }

    /// Horizon in time units.
    pub fn max_time(&self) -> f64 {
        self.params.max_steps as f64 * self.params.dt
    }
}

/// Inverse-CDF table of exp(−U) on the reactant side between the wall and the barrier.
fn thermal_table(pot: &AnyPotential, wall: f64, barrier: f64) -> Vec<(f64, f64)> {
    let n = 4096;
    let (a, b) = (wall.min(barrier), wall.max(barrier));
    let xs: Vec<f64> = (0..=n).map(|i| a + (b - a) * i as f64 / n as f64).collect();
    let umin = xs.iter().map(|&x| pot.u(x)).fold(f64::INFINITY, f64::min);
    let w: Vec<f64> = xs.iter().map(|&x| (umin - pot.u(x)).exp()).collect();
    let mut cdf = vec![0.0; n + 1];
    for i in 1..=n {
        cdf[i] = cdf[i - 1] + 0.5 * (w[i - 1] + w[i]);
    }
    let total = cdf[n];
    xs.into_iter()
        .zip(cdf)
        .map(|(x, c)| (x, c / total))
        .collect()
}

/// A fingerprint of everything that determines the outcomes: U' and D sampled across the domain,
/// the loop parameters (with the memory time, so records of another τ are refused), the ensemble
/// size and seed. Memoryless runs keep the fingerprint they had before memory existed.
fn fingerprint(m: &Model, p: &Params, n: u64) -> u64 {
    let (lo, hi) = (p.lo, p.hi);
    let mut s = format!(
        "{:?}|{:?}|{:?}|{}|{:?}|{:?}|{:?}|{:?}|{:?}|{:?}|{:?}|{n}|",
        p.kind,
        p.dt,
        p.max_steps,
        p.seed,
        p.target,
        p.dir,
        lo,
        hi,
        p.mass,
        p.gamma,
        matches!(p.start, Start::Thermal(_))
    );
    if p.kind == Kind::BaoabMemory {
        s.push_str(&format!("tau={:?}|", p.memory_time));
    }
    for i in 0..=64 {
        let x = lo + (hi - lo) * f64::from(i) / 64.0;
        s.push_str(&format!(
            "{:?},{:?};",
            m.system.potential.du(x),
            m.system.diffusion.value(x)
        ));
    }
    fnv1a(s.as_bytes())
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
    mut on_done: impl FnMut(&Outcome) -> bool,
) -> Vec<Outcome> {
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
        let worker = s.spawn(move || {
            pool.scope(|sc| {
                for _ in 0..workers {
                    let tx = tx.clone();
                    sc.spawn(move |_| {
                        let mut send = |o: Outcome| {
                            let _ = tx.send(o);
                        };
                        run_worker(plan, indices, cursor, halt, &mut send);
                    });
                }
            });
            drop(tx);
        });
        // Poll rather than block: a receiver asleep in recv() makes every send a futex wake-up
        // (12% of the run time in a profile of short trajectories). 2 ms keeps records timely.
        loop {
            let finished = worker.is_finished();
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::potential::Family;

    // Thermal starts follow exp(−U/kT) on the reactant side: the mean and variance of 20 000 draws
    // match the Boltzmann moments (computed here by a fine trapezoid sum, common practice, no
    // source) within 4 standard errors; the table's linear interpolation is exact to O(h²) = 1e-7.
    #[test]
    fn thermal_starts_follow_the_boltzmann_law() {
        let fam = Family::DoubleWell {
            eb: 8.0,
            a: 1.0,
            domain: (-3.0, 3.0),
        };
        let pot = AnyPotential::Family(fam);
        let start = Start::Thermal(thermal_table(&pot, -3.0, 0.0));
        let n = 20_000;
        let mut xs = Vec::with_capacity(n);
        for i in 0..n as u64 {
            xs.push(start.draw_for_test(&mut engine::stream(3, i)));
        }
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        let (mut z, mut m1, mut m2) = (0.0, 0.0, 0.0);
        let m = 200_000;
        for i in 0..=m {
            let x = -3.0 + 3.0 * f64::from(i) / f64::from(m);
            let w = (-pot.u(x)).exp() * if i == 0 || i == m { 0.5 } else { 1.0 };
            z += w;
            m1 += w * x;
            m2 += w * x * x;
        }
        let (em, ev) = (m1 / z, m2 / z - (m1 / z).powi(2));
        let se = (ev / n as f64).sqrt();
        assert!((mean - em).abs() < 4.0 * se, "{mean} vs {em} ± {se}");
        // variance of the sample variance ~ 2σ⁴/n for a near-Gaussian law
        assert!(
            (var - ev).abs() < 4.0 * ev * (2.0 / n as f64).sqrt(),
            "{var} vs {ev}"
        );
    }
}

/// Calls `$body` with `$f` bound to the plan's concrete force and `$m` to its mobility, so generic
/// code is monomorphised for each combination.
macro_rules! with_force {
    ($plan:expr, |$f:ident, $m:ident| $body:expr) => {{
        let plan = $plan;
        let cd = force::ConstD(plan.d_const);
        match (&plan.force, &plan.mobility) {
            (FastForce::DoubleWell($f), None) => {
                let $m = &cd;
                $body
            }
            (FastForce::Cubic($f), None) => {
                let $m = &cd;
                $body
            }
            (FastForce::Washboard($f), None) => {
                let $m = &cd;
                $body
            }
            (FastForce::Grid($f), None) => {
                let $m = &cd;
                $body
            }
            (FastForce::DoubleWell($f), Some($m)) => $body,
            (FastForce::Cubic($f), Some($m)) => $body,
            (FastForce::Washboard($f), Some($m)) => $body,
            (FastForce::Grid($f), Some($m)) => $body,
        }
    }};
}

/// A rare-event estimate.
#[derive(Debug, Clone)]
pub enum RareResult {
    /// forward flux sampling
    Ffs(ffs::FfsResult),
    /// reactive flux
    Flux(flux::FluxResult),
}

/// Runs the plan's rare-event method (FFS or reactive flux) on `threads` threads; returns the
/// estimate and the wall time.
///
/// # Errors
/// Bad interfaces, or an interruption.
pub fn run_rare(
    plan: &Plan,
    m: &Model,
    t: &TheoryReport,
    threads: usize,
    stop: &AtomicBool,
) -> Result<(RareResult, f64, usize), SimError> {
    let (pool, threads) = pool_for(threads);
    let l = &t.landscape;
    let t0 = std::time::Instant::now();
    let res = pool.install(|| match plan.method {
        Method::Ffs => {
            let replicas = plan.section.replicas.map_or(ffs::REPLICAS, |r| r as usize);
            let (ifs, automatic, probs) = match &plan.section.interfaces {
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
                    let (v, p) = ffs::place_interfaces(&m.system.potential, &m.system.diffusion, l);
                    (v, true, p)
                }
            };
            let trials = plan
                .section
                .trials
                .unwrap_or_else(|| ffs::trials_for(&probs, ffs::TARGET_REL_ERROR, replicas));
            with_force!(plan, |f, mb| ffs::run(
                plan, f, mb, l, &ifs, automatic, trials, replicas, stop
            ))
            .map(RareResult::Ffs)
        }
        Method::ReactiveFlux => {
            let tst = t.rates.tst_exact.ok_or_else(|| {
                key_err("particle.mass", "reactive flux needs a mass for the TST rate")
            })?;
            let n = plan
                .section
                .trajectories
                .unwrap_or(DEFAULT_FLUX_TRAJECTORIES);
            let window = plan.section.flux_time.unwrap_or_else(|| {
                if plan.params.kind == Kind::BaoabMemory {
                    flux::default_window_memory(l, plan.params.gamma, plan.params.memory_time)
                } else {
                    flux::default_window(l, plan.params.gamma)
                }
            });
            let steps = n as f64 * (window / plan.params.dt).ceil();
            if steps > REFUSE_FACTOR * plan.budget_steps {
                return Err(key_err(
                    "simulation.flux_time",
                    format!(
                        "reactive flux over a window of {window:.3e} needs about {steps:.2e} steps ({n} trajectories), more than {REFUSE_FACTOR}x simulation.budget_steps = {:.2e}: shorten flux_time, use fewer trajectories or raise the budget",
                        plan.budget_steps
                    ),
                ));
            }
            with_force!(plan, |f, mb| flux::run(plan, f, mb, l, tst, n, window, stop))
                .map(RareResult::Flux)
        }
        Method::BruteForce => Err(key_err(
            "simulation.method",
            "brute force runs through run_ensemble",
        )),
    })?;
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

/// Planned stage probability for user-given interfaces (unknown in advance).
const STAGE_GUESS: f64 = 0.2;

/// Runs the well-to-well transition count of [`transitions`] for a double well: the default
/// trajectory length makes about `simulation.transitions` (default 400) transitions expected from
/// the well-to-well theory rate (or the escape rate when that is missing). Returns the result and
/// the wall time.
///
/// # Errors
/// No product well, a run far beyond the step budget, or an interruption.
pub fn run_transitions(
    plan: &Plan,
    m: &Model,
    t: &TheoryReport,
    threads: usize,
    stop: &AtomicBool,
) -> Result<(transitions::TransitionResult, f64), SimError> {
    let l = &t.landscape;
    let n = plan
        .section
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
        .section
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
            &m.system.potential,
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
        .section
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
