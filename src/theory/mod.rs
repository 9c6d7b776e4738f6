//! Rate theory: every Kramers-type rate for a scenario, the exact overdamped MFPT, and the regime
//! diagnosis that says which of them hold. Formulas and sources live in the submodules; all
//! quantities here are internal (kT = 1, scenario length and time units), and rates are computed
//! as logarithms so barriers up to hundreds of kT neither overflow nor underflow.

pub mod catalogue;
pub mod fv2d;
pub mod kramers;
pub mod langer;
pub mod mfpt;
pub mod periodic;
pub mod pgh;
pub mod plane;
pub mod regime;
pub mod tst;
pub mod turnover;

pub use catalogue::{RateKey, Rates};

use crate::landscape::{Landscape, LandscapeError};
use crate::potential::{Diffusion, Potential};
use crate::system::System;
use catalogue::{CATALOGUE, Formula, MfptCheck, RateContext, Value};
use mfpt::Mfpt;
use regime::RegimeName;
use serde::Serialize;
use thiserror::Error;

/// Theory problems.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum TheoryError {
    /// The landscape could not be analysed.
    #[error(transparent)]
    Landscape(#[from] LandscapeError),
    /// The periodic analysis failed.
    #[error(transparent)]
    Periodic(#[from] periodic::PeriodicError),
    /// A periodic analysis was asked of a scenario without a period.
    #[error("the scenario has no period (potential.periodic or the washboard family)")]
    NotPeriodic,
}

impl TheoryError {
    /// The scenario key to look at.
    pub fn key(&self) -> &'static str {
        match self {
            Self::Landscape(e) => e.key(),
            Self::Periodic(e) => e.key(),
            Self::NotPeriodic => "potential.periodic",
        }
    }
}

/// The documented accuracy of each rate against a simulated escape rate, as the allowed range of
/// theory/simulation (the formula's [`catalogue::Band`]): asymptotic formulas neglect
/// finite-barrier corrections of order kT/E_b, by which they overestimate the escape rate
/// (PHYSICS.md §2, §4: 10–15% at 7 kT); TST is an upper bound; the exact MFPT is exact for
/// overdamped dynamics up to the time-step bias (1% at the default dt). A 3% margin on the other
/// side covers the simulation's time-step bias. PGH can also fall short: at strong friction its
/// energy loss stays near 0.8 E_b, so Υ = A(Δ/kT) < 1 by about 2e^{−Δ/4}/sqrt(πΔ), which is of
/// order kT/E_b for moderate barriers (0.16 at 6 kT).
pub fn accuracy_band(key: RateKey, barrier_kt: f64) -> (f64, Option<f64>) {
    Formula::of(key).band.limits(barrier_kt)
}

/// Consistency of the rates that hold: when 1/MFPT holds (overdamped dynamics, where it is exact)
/// every other escape rate marked as holding must agree with it within that rate's documented
/// accuracy ([`accuracy_band`]); rates with inertia (Kramers, turnover, PGH) after Kramers' own
/// overdamped correction λ₊γ/ω_b² (Kramers 1940: λ₊/ω_b → ω_b/γ). One that does not is no longer trusted, and a warning says which
/// rate to believe: 1/MFPT integrates the profile and needs no curvature, so it is robust to
/// noise in U'' and to an anharmonic well or barrier, the two reasons a harmonic rate fails here.
/// Skipped when the target lies close to the barrier top (then 1/MFPT itself is off by up to 2×
/// and the landscape already warns). Which rates are checked, and against what, is each
/// formula's [`catalogue::MfptCheck`]: the escape rates of the spatial-diffusion family approach
/// 1/MFPT; the well-to-well rate is another quantity and TST an upper bound of the inertial rate.
fn check_consistency(t: &mut TheoryReport) {
    let Some(exact) = t
        .rows
        .iter()
        .find(|r| r.key == RateKey::Mfpt && r.valid)
        .and_then(|r| r.rate)
    else {
        return;
    };
    let l = &t.landscape;
    if l.target_rule != crate::landscape::TargetRule::MetastableDrop
        && l.u_barrier - l.u_target < crate::landscape::TARGET_DROP_WARN_KT
    {
        return;
    }
    let eb = l.barrier_height;
    // 1/MFPT is the overdamped limit; the inertial rates keep Kramers' transmission λ₊/ω_b where
    // the overdamped one has ω_b/γ, so they are set against 1/MFPT times λ₊γ/ω_b² (0.96 at the
    // γ/ω_b = 5 where 1/MFPT starts to hold, → 1 at strong friction)
    let inertial = match (t.friction, l.omega_barrier) {
        (Some(g), Some(wb)) => kramers::lambda_plus(g, wb) * g / (wb * wb),
        _ => 1.0,
    };
    for r in t.rows.iter_mut() {
        let Some(k) = r.rate.filter(|_| r.valid) else {
            continue;
        };
        let reference = match Formula::of(r.key).mfpt_check {
            MfptCheck::None => continue,
            MfptCheck::Overdamped => exact,
            MfptCheck::Inertial => exact * inertial,
        };
        let ratio = k / reference;
        let (lo, hi) = accuracy_band(r.key, eb);
        if ratio >= lo && hi.is_none_or(|h| ratio <= h) {
            continue;
        }
        let allowed = match hi {
            Some(h) => format!("[{lo:.3}, {h:.3}]"),
            None => format!("at least {lo:.3}"),
        };
        r.valid = false;
        r.note = format!(
            "disagrees with the exact 1/MFPT (ratio {ratio:.3}, allowed {allowed} at {eb:.1} kT)"
        );
        t.regime.warnings.push(format!(
            "{} applies in this regime but differs from 1/MFPT by a factor {ratio:.3}, beyond its documented accuracy {allowed} at E_b = {eb:.2} kT: the profile is not parabolic over a thermal width at the well or the barrier top (an anharmonic profile, or curvatures from noise); believe 1/MFPT, which integrates the profile and needs no curvature",
            r.label
        ));
    }
}

/// One rate with its standing in this regime.
#[derive(Debug, Clone, Serialize)]
pub struct RateRow {
    /// the formula
    pub key: RateKey,
    /// a readable name
    pub label: &'static str,
    /// the rate (per time unit), if it applies
    pub rate: Option<f64>,
    /// whether it is trustworthy here
    pub valid: bool,
    /// why, or what it is
    pub note: String,
}

/// The regime diagnosis.
#[derive(Debug, Clone, Serialize)]
pub struct RegimeReport {
    /// regime name
    pub name: RegimeName,
    /// γ/ω_b, if a mass and friction are known
    pub gamma_over_omega_barrier: Option<f64>,
    /// δ = γ I_b / kT
    pub delta: Option<f64>,
    /// E_b / kT
    pub barrier_kt: f64,
    /// keys of the rates that hold here
    pub trusted: Vec<RateKey>,
    /// everything a user should know
    pub warnings: Vec<String>,
}

/// Everything the analytic half computes.
#[derive(Debug, Clone, Serialize)]
pub struct TheoryReport {
    /// landscape
    pub landscape: Landscape,
    /// regime
    pub regime: RegimeReport,
    /// rates
    pub rates: Rates,
    /// rates with validity, in display order
    pub rows: Vec<RateRow>,
    /// the MFPT and its convergence
    pub mfpt: Mfpt,
    /// γ used for friction-dependent rates
    pub friction: Option<f64>,
    /// D at the barrier top
    pub diffusion_barrier: f64,
    /// A(δ)
    pub depopulation: Option<f64>,
    /// the PGH energy loss along the unstable normal mode and Υ = A(Δ/kT)
    pub pgh: Option<PghReport>,
    /// drift, effective diffusion and hopping rates of a periodic landscape
    pub periodic: Option<periodic::PeriodicTheory>,
}

/// The energy loss behind the PGH rate.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct PghReport {
    /// Δ/kT, the energy the unstable normal mode loses in one excursion into the well
    pub energy_loss: f64,
    /// Υ = A(Δ/kT)
    pub depopulation: f64,
    /// u₀₀², the unstable mode's share of the system coordinate
    pub u00_squared: f64,
    /// the turning point of the unstable mode's orbit (the wall when it is reflected there)
    pub turning_point: f64,
    /// whether the orbit is reflected by the wall
    pub reflected: bool,
}

/// The PGH report and ln k_PGH = ln[(λ‡/ω_b) k_TST] + ln Υ, where `ln_prefactor_rate` is
/// ln[(λ‡/ω_b) k_TST] for the same friction (Kramers, or Grote–Hynes with a memory time); `None`
/// with a warning when the unstable mode's orbit cannot be followed.
fn pgh_rate(
    pot: &dyn Potential,
    mass: f64,
    gamma: f64,
    memory_time: Option<f64>,
    l: &Landscape,
    ln_prefactor_rate: f64,
    warnings: &mut Vec<String>,
) -> Option<(PghReport, f64)> {
    if gamma <= 0.0 {
        return None;
    }
    let args = (l.barrier, l.curvature_barrier, l.turning_point, l.wall);
    match pgh::energy_loss(
        pot,
        mass,
        gamma,
        memory_time,
        args.0,
        args.1,
        args.2,
        args.3,
    ) {
        Ok(e) => {
            let ln_ups = turnover::ln_depopulation(e.delta);
            let report = PghReport {
                energy_loss: e.delta,
                depopulation: ln_ups.exp(),
                u00_squared: e.u00_squared,
                turning_point: e.turning_point,
                reflected: e.reflected,
            };
            Some((report, ln_prefactor_rate + ln_ups))
        }
        Err(e) => {
            warnings.push(format!("{e}: the PGH rate is not given"));
            None
        }
    }
}

/// Stationary points strictly between two positions (panel breakpoints for quadrature).
fn between(l: &Landscape, a: f64, b: f64) -> Vec<f64> {
    let (lo, hi) = (a.min(b), a.max(b));
    l.points
        .iter()
        .map(|p| p.x)
        .filter(|&x| x > lo && x < hi)
        .collect()
}

/// Analyses the landscape and computes every rate.
///
/// # Errors
/// Landscape problems (no minimum, no barrier, no target, …).
pub fn analyse(model: &System) -> Result<TheoryReport, TheoryError> {
    let pot = &model.potential;
    let l = Landscape::analyse(pot, model.start, model.target, model.mass)?;
    let t = rates_for(
        pot,
        &model.diffusion,
        model.mass,
        model.friction,
        model.memory_time,
        l,
    );
    let mut t = t;
    if model.period.is_some() {
        let p = analyse_periodic(model, t.landscape.reactant, t.friction)?;
        t.regime.warnings.extend(p.warnings.iter().cloned());
        if model.memory_time.is_some() {
            t.regime.warnings.push(
                "memory friction: the drift, effective diffusion and hopping rates of the periodic analysis assume memoryless overdamped dynamics".into(),
            );
        }
        t.periodic = Some(p);
    }
    let implausible = plausibility_warnings(model, &t);
    t.regime.warnings.extend(implausible);
    Ok(t)
}

/// γ/ω_b beyond this factor either way is implausible for a physical system: more likely a rate
/// typed in another time unit (1/s where 1/ps was meant is a factor 1e12).
pub const IMPLAUSIBLE_FRICTION_RATIO: f64 = 1e8;
/// Barriers above this (in kT) give rates of order e^-1000, zero for any purpose: more likely a
/// wrong energy unit or temperature.
pub const IMPLAUSIBLE_BARRIER_KT: f64 = 1000.0;
/// Temperatures outside this range (K) are implausible for thermally activated escape.
pub const PLAUSIBLE_TEMPERATURE_K: (f64, f64) = (1.0, 1e5);

/// Warnings about values that are valid but implausible (the results are still computed): a
/// friction many orders of magnitude from ω_b (given, or implied by D), a temperature below 1 K
/// or above 1e5 K, a barrier above 1000 kT.
pub fn plausibility_warnings(model: &System, t: &TheoryReport) -> Vec<String> {
    let mut w = Vec::new();
    if let Some(r) = t.regime.gamma_over_omega_barrier
        && !(1.0 / IMPLAUSIBLE_FRICTION_RATIO..=IMPLAUSIBLE_FRICTION_RATIO).contains(&r)
    {
        w.push(format!(
            "particle.friction (or the friction kT/(mD) implied by particle.diffusion) is {r:.2e} times the barrier frequency ω_b: implausible (beyond {IMPLAUSIBLE_FRICTION_RATIO:.0e} either way); check its value and time unit"
        ));
    }
    if let Some(temp) = model.temperature_k
        && !(PLAUSIBLE_TEMPERATURE_K.0..=PLAUSIBLE_TEMPERATURE_K.1).contains(&temp)
    {
        w.push(format!(
            "units.temperature = {temp} K is implausible (outside {} K to {:.0e} K): check the value",
            PLAUSIBLE_TEMPERATURE_K.0, PLAUSIBLE_TEMPERATURE_K.1
        ));
    }
    let eb = t.landscape.barrier_height;
    if eb > IMPLAUSIBLE_BARRIER_KT {
        w.push(format!(
            "the barrier is {eb:.4e} kT, above {IMPLAUSIBLE_BARRIER_KT} kT: implausible (rates of order e^-{eb:.0}); check the energy unit and units.temperature"
        ));
    }
    w
}

/// What [`analyse_or_running`] found.
#[derive(Debug, Clone)]
pub enum Analysis {
    /// a landscape with a reactant well: every rate
    Full(Box<TheoryReport>),
    /// a periodic landscape tilted past its critical tilt (no minimum left): drift and effective
    /// diffusion only
    Running(Box<periodic::PeriodicTheory>),
}

/// As [`analyse`], except that a periodic landscape with no minimum left (the running state past
/// the critical tilt) gives its periodic analysis instead of an error.
///
/// # Errors
/// As [`analyse`].
pub fn analyse_or_running(model: &System) -> Result<Analysis, TheoryError> {
    match analyse(model) {
        Ok(t) => Ok(Analysis::Full(Box::new(t))),
        Err(TheoryError::Landscape(LandscapeError::NoMinimum { .. })) if model.period.is_some() => {
            let p = analyse_periodic(model, f64::NAN, model.friction)?;
            Ok(Analysis::Running(Box::new(p)))
        }
        Err(e) => Err(e),
    }
}

/// The periodic analysis of a scenario with a period (`None` without one): drift, effective
/// diffusion, and hopping out of the minimum nearest `x_a_guess` (NaN: the base period's start).
/// It needs no landscape, so it also describes the running state past the critical tilt, where
/// no minimum is left.
///
/// # Errors
/// A profile that is not periodic, or non-finite values.
pub fn analyse_periodic(
    model: &System,
    x_a_guess: f64,
    friction: Option<f64>,
) -> Result<periodic::PeriodicTheory, TheoryError> {
    let pot = &model.potential;
    let period = model.period.ok_or(TheoryError::NotPeriodic)?;
    // the base period: the wrapper's own, or the washboard's domain start
    let x0 = match pot {
        crate::potential::AnyPotential::Periodic(w) => w.origin(),
        other => other.domain().0,
    };
    Ok(periodic::analyse(
        pot,
        &model.diffusion,
        x0,
        period,
        x_a_guess,
        model.mass,
        friction,
    )?)
}

/// Marks the memoryless friction-dependent rates as not holding when the friction has an
/// exponential memory kernel of memory time `tau` (Grote & Hynes, J. Chem. Phys. 73, 2715
/// (1980)); the Grote–Hynes rate and PGH for the same kernel hold instead.
fn apply_memory(rows: &mut [RateRow], warnings: &mut Vec<String>, tau: f64) {
    for r in rows.iter_mut().filter(|r| Formula::of(r.key).memoryless) {
        if r.valid {
            r.valid = false;
            r.note = "assumes memoryless friction (memory_time is set)".into();
        }
    }
    warnings.push(format!(
        "memory friction (tau = {tau:.4e}): the Grote-Hynes rate applies at strong friction and PGH (with the same kernel) at all frictions; Kramers, Mel'nikov-Meshkov and the MFPT assume memoryless friction"
    ));
}

/// The rate table: one row per formula of the [catalogue](catalogue::CATALOGUE) (a formula that
/// does not apply has a row unless it is one that only exists with a memory time), with its
/// validity here.
fn rows_for(c: &RateContext, rates: &Rates) -> Vec<RateRow> {
    let mut formulas: Vec<&Formula> = CATALOGUE.iter().collect();
    formulas.sort_by_key(|f| f.row);
    formulas
        .into_iter()
        .filter_map(|f| {
            let rate = rates[f.key];
            let (valid, note) = match rate {
                Some(_) => (f.holds)(c),
                None if !f.row_when_absent => return None,
                None if c.mass.is_none() => (false, "needs particle.mass"),
                None => (false, (f.absent)(c)),
            };
            Some(RateRow {
                key: f.key,
                label: f.label,
                rate,
                valid,
                note: note.into(),
            })
        })
        .collect()
}

/// Computes the rates for an analysed landscape, formula by formula in catalogue order; with a
/// `memory_time` the friction has the exponential kernel, which brings in Grote–Hynes and PGH
/// for that kernel.
pub fn rates_for(
    pot: &dyn Potential,
    diffusion: &Diffusion,
    mass: Option<f64>,
    friction: Option<f64>,
    memory_time: Option<f64>,
    l: Landscape,
) -> TheoryReport {
    let eb = l.barrier_height;
    let d_b = diffusion.value(l.barrier);
    // γ: as given, or from D at the barrier when D varies (Einstein relation, kT = 1)
    let gamma = friction.or_else(|| mass.map(|m| 1.0 / (m * d_b)));
    let mut warnings = l.warnings.clone();

    let extra = between(&l, l.wall, l.target);
    let m = mfpt::mfpt(pot, diffusion, l.wall, l.reactant, l.target, &extra);
    if m.last_change > 1e-8 {
        warnings.push(format!(
            "the MFPT quadrature changed by {:.1e} (relative) at the last panel doubling: it may be inaccurate",
            m.last_change
        ));
    }
    let transmission = match (gamma, l.omega_barrier) {
        (Some(g), Some(wb)) => Some(kramers::lambda_plus(g, wb) / wb),
        _ => None,
    };
    // extreme inputs (a mass of 1e300, say) can make the action or δ degenerate: such rates are
    // then reported as not applicable rather than computed from nonsense
    let delta = match (gamma, l.action) {
        (Some(g), Some(i)) => Some(g * i).filter(|d| d.is_finite() && *d > 0.0),
        _ => None,
    };
    if gamma.is_some() && l.action.is_some() && delta.is_none() {
        warnings.push(
            "delta = gamma I_b/kT is zero or not finite for these values (extreme mass or friction): the energy-diffusion and turnover rates are not given".into(),
        );
    }
    let ln_a = delta.map(turnover::ln_depopulation);
    // well-to-well (double wells with a product minimum): δ₂ from the product-side orbit
    let delta2 = match (gamma, l.action_product) {
        (Some(g), Some(i)) => Some(g * i).filter(|d| d.is_finite() && *d > 0.0),
        _ => None,
    };
    let g_over_wb = gamma.zip(l.omega_barrier).map(|(g, w)| g / w);
    let name = regime::classify(g_over_wb, delta);

    let mut c = RateContext::new(pot, diffusion, mass, memory_time, &l, &m, gamma, d_b);
    c.delta = delta;
    c.delta_product = delta2;
    c.ln_depopulation = ln_a;
    c.transmission = transmission;
    c.gamma_over_omega_barrier = g_over_wb;
    c.regime = name;
    c.warnings = warnings;
    let mut rates = Rates::default();
    for f in CATALOGUE {
        let v = (f.rate)(&mut c);
        c.set(f.key, v);
        rates[f.key] = v.map(Value::rate);
    }
    let mut rows = rows_for(&c, &rates);
    let (pgh, mut warnings) = (c.pgh, c.warnings);
    if diffusion.constant().is_none() {
        warnings.push(format!(
            "D depends on x: the Smoluchowski and friction-dependent rates use D at the barrier top, D(x_b) = {d_b:.4}; the MFPT uses D(x) exactly"
        ));
    }
    // the memory kernel applies where its Grote–Hynes rate does
    if let Some(tau) = memory_time.filter(|_| rates[RateKey::GroteHynes].is_some()) {
        apply_memory(&mut rows, &mut warnings, tau);
    }
    let mut t = TheoryReport {
        regime: RegimeReport {
            name,
            gamma_over_omega_barrier: g_over_wb,
            delta,
            barrier_kt: eb,
            trusted: Vec::new(),
            warnings,
        },
        landscape: l,
        rates,
        rows,
        mfpt: m,
        friction: gamma,
        diffusion_barrier: d_b,
        depopulation: ln_a.map(f64::exp),
        pgh,
        periodic: None,
    };
    check_consistency(&mut t);
    t.regime.trusted = t.rows.iter().filter(|r| r.valid).map(|r| r.key).collect();
    t
}
