//! Reactive flux (Bennett 1977; Chandler, J. Chem. Phys. 68, 2959 (1978)) for underdamped
//! dynamics: k = κ_plateau · k_TST, with k_TST the exact 1-D TST rate (flux over population by
//! quadrature) and the transmission coefficient
//!   κ(t) = ⟨v₀ θ(λ(t) − λ_b)⟩ / ⟨v₀ θ(v₀)⟩
//! from trajectories started at the barrier top with thermal velocities. With |v₀| drawn from the
//! flux-weighted (Rayleigh) law, κ(t) = ⟨θ⟩_{v₀>0} − ⟨θ⟩_{v₀<0} (half the trajectories each way),
//! which has lower variance than weighting Maxwell draws by v₀.
//!
//! With memory friction (generalised Langevin equation, PHYSICS.md §5) the start also draws the
//! memory force z from its stationary law N(0, mγkT/τ), independent of x and v, so the TST rate
//! (which depends on the x–v marginal only) is unchanged and κ is to be compared with Grote–Hynes'
//! λ_r/ω_b (Grote & Hynes, J. Chem. Phys. 73, 2715 (1980)).
//!
//! Plateau: κ(t) is sampled on a uniform grid up to t_max; its plateau value is the mean over the
//! last fifth, and the plateau is reached at the first time after which κ stays within three
//! standard errors of that value. Reported as reached when that happens before 60% of t_max.

use super::{Context, RareSummary};
use crate::landscape::Landscape;
use crate::seed;
use crate::simulate::engine::{self, Consts, Kind, State};
use crate::simulate::force::{Force, Mobility};
use crate::simulate::{Plan, REFUSE_FACTOR, SimError, key_err, with_force};
use rand::RngExt;
use rayon::prelude::*;
use serde::Serialize;
use std::sync::atomic::{AtomicBool, Ordering};

/// Default reactive-flux ensemble.
pub const DEFAULT_FLUX_TRAJECTORIES: u64 = 20_000;
/// Points on the κ(t) grid.
const POINTS: usize = 200;
/// z for a two-sided 95% interval.
const Z95: f64 = 1.959_963_984_540_054;

/// A reactive-flux estimate.
#[derive(Debug, Clone, Serialize)]
pub struct FluxResult {
    /// κ at the plateau
    pub kappa: f64,
    /// its 95% interval
    pub kappa_ci95: [f64; 2],
    /// κ_plateau · k_TST (per time unit)
    pub rate: f64,
    /// 95% interval of the rate
    pub rate_ci95: [f64; 2],
    /// the exact 1-D TST rate used
    pub tst_exact: f64,
    /// when κ(t) settled (time units), if it did
    pub plateau_time: Option<f64>,
    /// whether the plateau was reached well inside the window
    pub plateau_reached: bool,
    /// the window
    pub t_max: f64,
    /// trajectories
    pub trajectories: u64,
    /// steps spent
    pub total_steps: u64,
    /// κ(t) on the grid: (t, κ)
    pub kappa_curve: Vec<(f64, f64)>,
}

impl FluxResult {
    /// The part every method's record shows.
    pub fn summary(&self) -> RareSummary {
        let mut warnings = Vec::new();
        if !self.plateau_reached {
            warnings.push(format!(
                "kappa(t) had not settled well inside the window t_max = {:.4e}: raise simulation.flux_time",
                self.t_max
            ));
        }
        RareSummary {
            trajectories: self.trajectories,
            rate: self.rate,
            rate_ci95: self.rate_ci95,
            rate_ci_method: "normal interval of the plateau transmission coefficient, times the exact TST rate",
            total_steps: self.total_steps,
            warnings,
        }
    }
}

/// Reactive flux for a plan: `simulation.trajectories` (default [`DEFAULT_FLUX_TRAJECTORIES`])
/// over the window `simulation.flux_time` (default [`default_window`], or
/// [`default_window_memory`] with memory friction).
///
/// # Errors
/// No mass (no TST rate), a run beyond [`REFUSE_FACTOR`] × the step budget, or an interruption.
pub fn run_for(ctx: &Context<'_>) -> Result<FluxResult, SimError> {
    let plan = ctx.plan;
    let l = &ctx.theory.landscape;
    let tst = ctx.theory.rates.tst_exact.ok_or_else(|| {
        key_err(
            "particle.mass",
            "reactive flux needs a mass for the TST rate",
        )
    })?;
    let n = plan
        .settings
        .trajectories
        .unwrap_or(DEFAULT_FLUX_TRAJECTORIES);
    let window = plan.settings.flux_time.unwrap_or_else(|| {
        if plan.params.kind == Kind::BaoabMemory {
            default_window_memory(l, plan.params.gamma, plan.params.memory_time)
        } else {
            default_window(l, plan.params.gamma)
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
    with_force!(plan, |f, mb| run(plan, f, mb, l, tst, n, window, ctx.stop))
}

/// The default window: 20 barrier-crossing times 1/λ₊, and at least 5 well periods.
pub fn default_window(l: &Landscape, gamma: f64) -> f64 {
    let wb = l.omega_barrier.unwrap_or(1.0);
    let lp = crate::theory::kramers::lambda_plus(gamma, wb);
    let period = 2.0 * std::f64::consts::PI / l.omega_reactant.unwrap_or(wb);
    (20.0 / lp).max(5.0 * period)
}

/// The default window with exponential memory of time τ: 20 reactive times 1/λ_r (Grote–Hynes),
/// at least 5 well periods, and at least 20 τ so the bath forgets the start.
pub fn default_window_memory(l: &Landscape, gamma: f64, tau: f64) -> f64 {
    let wb = l.omega_barrier.unwrap_or(1.0);
    let lr = crate::theory::kramers::lambda_grote_hynes(gamma, wb, tau);
    let period = 2.0 * std::f64::consts::PI / l.omega_reactant.unwrap_or(wb);
    (20.0 / lr).max(5.0 * period).max(20.0 * tau)
}

/// Runs the reactive-flux estimate with `n` trajectories over the window `t_max`.
#[allow(clippy::too_many_arguments)] // the run's full context
pub fn run<F: Force, M: Mobility>(
    plan: &Plan,
    force: &F,
    mob: &M,
    l: &Landscape,
    tst_exact: f64,
    n: u64,
    t_max: f64,
    stop: &AtomicBool,
) -> Result<FluxResult, SimError> {
    let p = &plan.params;
    let c = Consts::new(p, mob);
    let stride = ((t_max / p.dt / POINTS as f64).ceil() as u64).max(1);
    let seed = seed::derive(p.seed, seed::REACTIVE_FLUX);
    let lam_b = p.dir * l.barrier;
    // per trajectory: sign and θ at each grid time
    let rows: Vec<(bool, Vec<bool>)> = (0..n)
        .into_par_iter()
        .map(|j| {
            if stop.load(Ordering::Relaxed) {
                return (j % 2 == 0, Vec::new());
            }
            let mut rng = seed::stream(seed, j);
            let forward = j % 2 == 0;
            let u: f64 = rng.random();
            // Rayleigh speed for kT = 1: |v| = sqrt(-2 ln(1-u) / m)
            let speed = (-2.0 * (-u).ln_1p() / p.mass).sqrt();
            let v = if forward { speed } else { -speed } * p.dir;
            let mut s = State::with_velocity(p, force, l.barrier, v, &mut rng);
            let mut th = Vec::with_capacity(POINTS);
            for _ in 0..POINTS {
                for _ in 0..stride {
                    engine::step_state(p, &c, force, mob, &mut s, &mut rng);
                }
                th.push(p.dir * s.x > lam_b);
            }
            (forward, th)
        })
        .collect();
    if stop.load(Ordering::Relaxed) {
        return Err(SimError::Interrupted);
    }
    let (nf, nb) = (
        rows.iter().filter(|r| r.0).count() as f64,
        rows.iter().filter(|r| !r.0).count() as f64,
    );
    let mut curve = Vec::with_capacity(POINTS);
    let mut se = Vec::with_capacity(POINTS);
    for k in 0..POINTS {
        let pf = rows.iter().filter(|r| r.0 && r.1[k]).count() as f64 / nf;
        let pb = rows.iter().filter(|r| !r.0 && r.1[k]).count() as f64 / nb;
        curve.push(((k as u64 + 1) as f64 * stride as f64 * p.dt, pf - pb));
        se.push((pf * (1.0 - pf) / nf + pb * (1.0 - pb) / nb).sqrt());
    }
    let tail = POINTS / 5;
    let kappa = curve[POINTS - tail..].iter().map(|c| c.1).sum::<f64>() / tail as f64;
    let kse = se[POINTS - 1];
    let settled = (0..POINTS)
        .find(|&k| (k..POINTS).all(|q| (curve[q].1 - kappa).abs() <= 3.0 * se[q].max(kse)));
    let plateau_time = settled.map(|k| curve[k].0);
    let lo = (kappa - Z95 * kse).max(0.0);
    let hi = kappa + Z95 * kse;
    Ok(FluxResult {
        kappa,
        kappa_ci95: [lo, hi],
        rate: kappa * tst_exact,
        rate_ci95: [lo * tst_exact, hi * tst_exact],
        tst_exact,
        plateau_time,
        plateau_reached: settled.is_some_and(|k| k * 10 <= POINTS * 6),
        t_max: curve[POINTS - 1].0,
        trajectories: n,
        total_steps: n * stride * POINTS as u64,
        kappa_curve: curve,
    })
}
