//! The validated run: dynamics, integrator, time step, horizon, start, forces and the method, in
//! internal units, from a [`System`], its `[simulation]` settings and its analysis.
//!
//! Defaults: dynamics underdamped when a mass and a friction are known and γ/ω_b < 5, or with
//! memory friction, else overdamped; the dynamics' own integrator (BAOAB, its memory variant for
//! the generalised Langevin equation, Leimkuhler–Matthews); time step 1% of the shortest period
//! 2π/ω and at most 0.2/γ, or 2% of the shortest overdamped relaxation time kT/(D|U''|), at the
//! reactant well and the barrier; horizon 20 expected escape times, so censoring costs e^{-20} of
//! the rate.

use super::engine::{Kind, Params, Start};
use super::force::{FastForce, GridD};
use super::methods::{self, Cost, Method};
use super::settings::{Scheme, Settings, StartRule};
use super::{
    DEFAULT_BUDGET_STEPS, DEFAULT_TRAJECTORIES, DT_FRICTION, DT_PERIOD_FRACTION,
    DT_RELAXATION_FRACTION, Dynamics, HORIZON_ESCAPE_TIMES, MEMORY_NEGLIGIBLE, REFUSE_FACTOR,
    SimError, key_err,
};
use crate::landscape::Landscape;
use crate::potential::{AnyPotential, Diffusion, Potential};
use crate::system::System;
use crate::theory::TheoryReport;

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
    pub settings: Settings,
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
    /// Builds the plan for `system` from its settings and its analysis `t` (for the landscape,
    /// defaults and horizon); `time_unit` names the scenario's time unit in record files.
    ///
    /// # Errors
    /// Underdamped dynamics without mass or friction, a scheme that does not fit the dynamics,
    /// memory friction with explicit overdamped dynamics, a time step or horizon that cannot be
    /// run, or a method refused for its cost or dynamics.
    pub fn new(
        system: &System,
        settings: &Settings,
        time_unit: &str,
        t: &TheoryReport,
    ) -> Result<Self, SimError> {
        let s = settings;
        let memory = system.memory_time;
        let l = &t.landscape;
        let dynamics = dynamics_for(system, s, t)?;
        let (kind, scheme) = integrator_for(dynamics, s.scheme, memory.is_some())?;
        let (mass, gamma) = match dynamics {
            Dynamics::Underdamped => (
                system
                    .mass
                    .ok_or_else(|| key_err("particle.mass", "underdamped dynamics needs a mass"))?,
                t.friction.ok_or_else(|| {
                    key_err("particle.friction", "underdamped dynamics needs a friction")
                })?,
            ),
            Dynamics::Overdamped => (1.0, 0.0),
        };
        let (lo, hi) = system.potential.domain();
        let d_a = system.diffusion.value(l.reactant);
        let scale = time_scale(
            dynamics,
            l,
            mass,
            gamma,
            d_a,
            system.diffusion.value(l.barrier),
        );
        let dt = s.dt.unwrap_or(scale.dt_default);
        let trajectories = s.trajectories.unwrap_or(DEFAULT_TRAJECTORIES);
        let budget_steps = s.budget_steps.unwrap_or(DEFAULT_BUDGET_STEPS);
        let mut warnings = check_dt(&scale, dt, s.dt.is_some(), trajectories, budget_steps)?;
        let k_expect = expected_rate(dynamics, memory.is_some(), t);
        let max_steps = horizon_steps(s.max_time, k_expect, dt)?;
        let start = match s.start {
            Some(StartRule::Thermal) => {
                Start::Thermal(thermal_table(&system.potential, l.wall, l.barrier))
            }
            _ => Start::At(l.reactant),
        };
        let force = FastForce::new(&system.potential);
        if force.rel_error() > 1e-6 {
            warnings.push(format!(
                "the tabulated force has a relative interpolation error of {:.1e}",
                force.rel_error()
            ));
        }
        let mobility = match (&system.diffusion, dynamics) {
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
        let fingerprint = fingerprint(system, &params, trajectories);
        let cost = brute_force_cost(trajectories, k_expect, max_steps, dt, budget_steps);
        let (method, method_reason) = methods::choose(s.method, dynamics, &cost)?;
        Ok(Self {
            dynamics,
            scheme,
            params,
            trajectories,
            dt_default: scale.dt_default,
            dt_given: s.dt.is_some(),
            force,
            mobility,
            d_const: d_a,
            warnings,
            fingerprint,
            method,
            method_reason,
            budget_steps,
            expected_brute_steps: cost.steps,
            settings: s.clone(),
            time_unit: time_unit.to_string(),
        })
    }

    /// Horizon in time units.
    pub fn max_time(&self) -> f64 {
        self.params.max_steps as f64 * self.params.dt
    }
}

/// The dynamics: as asked, else underdamped with memory friction or where inertia matters.
fn dynamics_for(system: &System, s: &Settings, t: &TheoryReport) -> Result<Dynamics, SimError> {
    let memory = system.memory_time.is_some();
    Ok(match s.dynamics {
        Some(Dynamics::Underdamped) => Dynamics::Underdamped,
        // the generalised Langevin equation is inertial: its embedding has no overdamped form
        Some(_) if memory => {
            return Err(key_err(
                "simulation.dynamics",
                "memory friction (particle.memory_time) needs underdamped dynamics: drop dynamics = \"overdamped\" or memory_time",
            ));
        }
        Some(_) => Dynamics::Overdamped,
        None if memory => Dynamics::Underdamped,
        // inertia matters below γ/ω_b = 5; above, the overdamped limit holds (to 4%) and is
        // far cheaper to integrate correctly
        None if system.mass.is_some()
            && t.friction.is_some()
            && t.regime
                .gamma_over_omega_barrier
                .is_some_and(|g| g < crate::theory::regime::GAMMA_OVERDAMPED) =>
        {
            Dynamics::Underdamped
        }
        None => Dynamics::Overdamped,
    })
}

/// The integrator for the dynamics and the scheme asked for (`memory`: memory friction given).
fn integrator_for(
    dynamics: Dynamics,
    scheme: Option<Scheme>,
    memory: bool,
) -> Result<(Kind, &'static str), SimError> {
    Ok(match (dynamics, scheme) {
        (Dynamics::Underdamped, None | Some(Scheme::Baoab | Scheme::BaoabMemory)) if memory => {
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
    })
}

/// The landscape's shortest time scale, its name, and the default dt from it.
struct TimeScale {
    t_scale: f64,
    name: &'static str,
    dt_default: f64,
}

/// The shortest time scale at the reactant well and the barrier (`d_a`, `d_b`: D there).
fn time_scale(
    dynamics: Dynamics,
    l: &Landscape,
    mass: f64,
    gamma: f64,
    d_a: f64,
    d_b: f64,
) -> TimeScale {
    match dynamics {
        Dynamics::Underdamped => {
            let w = (l.curvature_reactant.max(l.curvature_barrier) / mass).sqrt();
            let period = 2.0 * std::f64::consts::PI / w;
            // and γ dt ≤ 0.2: with γ dt ≫ 1 BAOAB still samples the right distribution but its
            // diffusion in x no longer follows D = kT/(mγ), so rates would be wrong. With
            // memory the same bound holds (the τ → 0 limit is BAOAB) and none is needed on τ:
            // the O-step propagates the stiff (v, z) block exactly for any τ/dt
            TimeScale {
                t_scale: period.min(1.0 / gamma),
                name: "the shorter of the period 2π/ω and 1/γ",
                dt_default: (DT_PERIOD_FRACTION * period).min(DT_FRICTION / gamma),
            }
        }
        Dynamics::Overdamped => {
            let tau = (1.0 / (d_a * l.curvature_reactant)).min(1.0 / (d_b * l.curvature_barrier));
            TimeScale {
                t_scale: tau,
                name: "the relaxation time kT/(D U'')",
                dt_default: DT_RELAXATION_FRACTION * tau,
            }
        }
    }
}

/// Refuses a dt so far below the time scale that crossing it once would exceed the budget, and
/// warns about a given dt above the default.
fn check_dt(
    scale: &TimeScale,
    dt: f64,
    given: bool,
    trajectories: u64,
    budget_steps: f64,
) -> Result<Vec<String>, SimError> {
    let TimeScale {
        t_scale,
        name: t_scale_name,
        dt_default,
    } = *scale;
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
    let mut warnings = Vec::new();
    if given && dt > dt_default {
        warnings.push(format!(
            "simulation.dt = {dt:.4e} is larger than the default {dt_default:.4e} for this landscape: expect a time-step bias in the rate (first passages are checked once per step)"
        ));
    }
    Ok(warnings)
}

/// A number whose natural logarithm is `ln`, as `d.dde±x`, also beyond the range of f64.
fn sci_from_ln(ln: f64) -> String {
    let l10 = ln / std::f64::consts::LN_10;
    let e = l10.floor();
    format!("{:.2}e{e}", 10f64.powf(l10 - e))
}

/// The expected escape rate: the trusted theory for these dynamics (1 without any).
fn expected_rate(dynamics: Dynamics, memory: bool, t: &TheoryReport) -> f64 {
    match dynamics {
        Dynamics::Underdamped if memory => {
            t.rates.grote_hynes.or(t.rates.turnover).or(t.rates.kramers)
        }
        Dynamics::Underdamped => t.rates.turnover.or(t.rates.kramers),
        Dynamics::Overdamped => t.rates.mfpt,
    }
    .or(t.rates.mfpt)
    .unwrap_or(1.0)
}

/// The horizon in steps: `max_time` as given, else [`HORIZON_ESCAPE_TIMES`] expected escape times.
fn horizon_steps(max_time: Option<f64>, k_expect: f64, dt: f64) -> Result<u64, SimError> {
    // the default horizon is capped at 1e15 steps (beyond any brute-force run; FFS and
    // reactive flux ignore it), so barriers of hundreds of kT still give a usable plan
    let max_time = max_time.unwrap_or((HORIZON_ESCAPE_TIMES / k_expect).min(1e15 * dt));
    // round, not ceil: max_time = n·dt must give n steps despite rounding in the division
    let max_steps_f = (max_time / dt).round();
    if !(1.0..1e18).contains(&max_steps_f) {
        return Err(key_err(
            "simulation.max_time",
            format!("max_time / dt = {max_steps_f:e} steps is not a usable horizon"),
        ));
    }
    Ok(max_steps_f as u64)
}

/// The expected brute-force cost: a trajectory lasts the expected escape time, or the horizon
/// when that is shorter.
fn brute_force_cost(
    trajectories: u64,
    k_expect: f64,
    max_steps: u64,
    dt: f64,
    budget: f64,
) -> Cost {
    let escape_time = 1.0 / k_expect;
    let per_trajectory = escape_time.min(max_steps as f64 * dt);
    let steps = trajectories as f64 * per_trajectory / dt;
    let text = format!(
        "expected brute-force cost {steps:.2e} steps ({trajectories} trajectories × {per_trajectory:.3e} per trajectory / dt {dt:.3e}; T = {}) against simulation.budget_steps = {budget:.2e}",
        if per_trajectory < escape_time {
            format!("the horizon max_time, shorter than the expected escape time {escape_time:.3e}")
        } else {
            "the expected escape time".to_string()
        }
    );
    Cost {
        steps,
        budget,
        text,
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
fn fingerprint(system: &System, p: &Params, n: u64) -> u64 {
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
            system.potential.du(x),
            system.diffusion.value(x)
        ));
    }
    fnv1a(s.as_bytes())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::potential::{AnyPotential, Family, Potential};

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
            xs.push(start.draw_for_test(&mut crate::seed::stream(3, i)));
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
