//! Rate theory: every Kramers-type rate for a scenario, the exact overdamped MFPT, and the regime
//! diagnosis that says which of them hold. Formulas and sources live in the submodules; all
//! quantities here are internal (kT = 1, scenario length and time units), and rates are computed
//! as logarithms so barriers up to hundreds of kT neither overflow nor underflow.

pub mod kramers;
pub mod mfpt;
pub mod periodic;
pub mod pgh;
pub mod regime;
pub mod tst;
pub mod turnover;

use crate::landscape::{LOW_BARRIER_KT, Landscape, LandscapeError};
use crate::potential::{Diffusion, Potential};
use crate::system::System;
use mfpt::Mfpt;
use regime::{DELTA_ED_VALID, DELTA_SPATIAL, RegimeName};
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

/// The rates (per time unit); `None` where a formula does not apply (no mass, or no friction).
#[derive(Debug, Clone, Copy, Default, Serialize)]
pub struct Rates {
    /// harmonic TST
    pub tst: Option<f64>,
    /// exact 1-D TST (flux over population)
    pub tst_exact: Option<f64>,
    /// Kramers spatial-diffusion
    pub kramers: Option<f64>,
    /// Smoluchowski (overdamped) limit
    pub smoluchowski: Option<f64>,
    /// energy-diffusion (escape from the well)
    pub energy_diffusion: Option<f64>,
    /// Mel'nikov–Meshkov turnover (escape from the well)
    pub turnover: Option<f64>,
    /// 1 / exact overdamped MFPT
    pub mfpt: Option<f64>,
    /// Grote–Hynes rate for memory friction (with particle.memory_time)
    pub grote_hynes: Option<f64>,
    /// Mel'nikov's well-to-well transition rate of a double well (not an escape rate)
    pub well_to_well: Option<f64>,
    /// Pollak–Grabert–Hänggi turnover rate for Ohmic friction (escape from the well)
    pub pgh: Option<f64>,
}

/// The documented accuracy of each rate against a simulated escape rate, as the allowed range of
/// theory/simulation: asymptotic formulas neglect finite-barrier corrections of order kT/E_b, by
/// which they overestimate the escape rate (PHYSICS.md §2, §4: 10–15% at 7 kT); TST is an upper
/// bound; the exact MFPT is exact for overdamped dynamics up to the time-step bias (1% at the
/// default dt). A 3% margin on the other side covers the simulation's time-step bias. PGH can also
/// fall short: at strong friction its energy loss stays near 0.8 E_b, so Υ = A(Δ/kT) < 1 by about
/// 2e^{−Δ/4}/sqrt(πΔ), which is of order kT/E_b for moderate barriers (0.16 at 6 kT).
pub fn accuracy_band(key: &str, barrier_kt: f64) -> (f64, Option<f64>) {
    let finite = (1.0 / barrier_kt.max(1.0)).min(0.5);
    match key {
        "mfpt" => (1.0 / 1.01, Some(1.0 / 0.99)),
        "tst" | "tst_exact" => (1.0 / 1.03, None),
        "pgh" => (1.0 / (1.03 + finite), Some(1.0 / (1.0 - finite))),
        _ => (1.0 / 1.03, Some(1.0 / (1.0 - finite))),
    }
}

/// Whether a rate that holds here can be checked against the exact 1/MFPT: the escape rates of the
/// spatial-diffusion family approach it (the MFPT is exact for the overdamped model); the
/// well-to-well rate is another quantity and TST an upper bound of the inertial rate.
fn checked_against_mfpt(key: &str) -> bool {
    !matches!(key, "mfpt" | "well_to_well" | "tst" | "tst_exact")
}

/// Consistency of the rates that hold: when 1/MFPT holds (overdamped dynamics, where it is exact)
/// every other escape rate marked as holding must agree with it within that rate's documented
/// accuracy ([`accuracy_band`]); rates with inertia (Kramers, turnover, PGH) after Kramers' own
/// overdamped correction λ₊γ/ω_b² (Kramers 1940: λ₊/ω_b → ω_b/γ). One that does not is no longer trusted, and a warning says which
/// rate to believe: 1/MFPT integrates the profile and needs no curvature, so it is robust to
/// noise in U'' and to an anharmonic well or barrier, the two reasons a harmonic rate fails here.
/// Skipped when the target lies close to the barrier top (then 1/MFPT itself is off by up to 2×
/// and the landscape already warns).
fn check_consistency(t: &mut TheoryReport) {
    let Some(exact) = t
        .rows
        .iter()
        .find(|r| r.key == "mfpt" && r.valid)
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
        let Some(k) = r.rate.filter(|_| r.valid && checked_against_mfpt(r.key)) else {
            continue;
        };
        let reference = if r.key == "smoluchowski" {
            exact
        } else {
            exact * inertial
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
    t.regime.trusted = t.rows.iter().filter(|r| r.valid).map(|r| r.key).collect();
}

/// One rate with its standing in this regime.
#[derive(Debug, Clone, Serialize)]
pub struct RateRow {
    /// the JSON key
    pub key: &'static str,
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
    pub trusted: Vec<&'static str>,
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

/// Adds the Grote–Hynes rate k_GH = (λ_r/ω_b) k_TST for an exponential memory kernel of memory
/// time `tau` (Grote & Hynes, J. Chem. Phys. 73, 2715 (1980)) and marks the memoryless
/// friction-dependent rates as not holding; PGH was computed for the same kernel by
/// [`rates_for`].
fn apply_memory(t: &mut TheoryReport, tau: f64) {
    let (Some(g), Some(wb), Some(tst)) = (t.friction, t.landscape.omega_barrier, t.rates.tst)
    else {
        return;
    };
    let k = kramers::lambda_grote_hynes(g, wb, tau) / wb * tst;
    t.rates.grote_hynes = Some(k);
    if let Some(r) = t.rows.iter_mut().find(|r| r.key == "pgh" && r.valid) {
        r.note = "holds at all frictions, exponential memory (finite-barrier error ~kT/E_b)".into();
    }
    let high = t.landscape.barrier_height >= LOW_BARRIER_KT;
    let row = RateRow {
        key: "grote_hynes",
        label: "Grote-Hynes (memory friction)",
        rate: Some(k),
        valid: high && t.regime.delta.is_none_or(|d| d >= DELTA_SPATIAL),
        note: if high {
            "memory friction, spatial-diffusion regime (delta >= 10)".into()
        } else {
            "barrier below 5 kT: asymptotic formula unreliable".into()
        },
    };
    // the friction-dependent memoryless formulas do not hold with memory
    for r in t.rows.iter_mut().filter(|r| {
        matches!(
            r.key,
            "kramers" | "smoluchowski" | "energy_diffusion" | "turnover" | "well_to_well" | "mfpt"
        )
    }) {
        if r.valid {
            r.valid = false;
            r.note = "assumes memoryless friction (memory_time is set)".into();
        }
    }
    t.rows.push(row);
    t.regime.trusted = t.rows.iter().filter(|r| r.valid).map(|r| r.key).collect();
    t.regime.warnings.push(format!(
        "memory friction (tau = {tau:.4e}): the Grote-Hynes rate applies at strong friction and PGH (with the same kernel) at all frictions; Kramers, Mel'nikov-Meshkov and the MFPT assume memoryless friction"
    ));
}

/// Computes the rates for an analysed landscape; with a `memory_time` the friction has the
/// exponential kernel, which brings in Grote–Hynes and PGH for that kernel.
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
    let ln_tst = l.omega_reactant.map(|w| tst::ln_harmonic(w, eb));
    let extra_b = between(&l, l.wall, l.barrier);
    let ln_tst_exact = mass.map(|m| tst::ln_exact(pot, m, l.wall, l.barrier, &extra_b));
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
    let ln_kramers = ln_tst.zip(transmission).map(|(k, t)| k + t.ln());
    let ln_smol = Some(kramers::ln_smoluchowski(
        d_b,
        l.curvature_reactant,
        l.curvature_barrier,
        eb,
    ));
    let ln_ed = ln_tst.zip(delta).map(|(k, d)| k + d.ln());
    let ln_mm = ln_kramers.zip(ln_a).map(|(k, a)| k + a);
    // PGH: the energy loss along the unstable normal mode replaces γ I_b
    // its prefactor rate (λ‡/ω_b) k_TST is Kramers', or Grote–Hynes' with memory
    let ln_pgh_prefactor = match (memory_time, gamma, l.omega_barrier, ln_tst) {
        (Some(tau), Some(g), Some(wb), Some(k)) => {
            Some(k + (kramers::lambda_grote_hynes(g, wb, tau) / wb).ln())
        }
        _ => ln_kramers,
    };
    let pgh = match (mass, gamma, ln_pgh_prefactor) {
        (Some(m), Some(g), Some(k)) => pgh_rate(pot, m, g, memory_time, &l, k, &mut warnings),
        _ => None,
    };
    let ln_pgh = pgh.map(|(_, k)| k);
    let pgh = pgh.map(|(p, _)| p);
    // well-to-well (double wells with a product minimum): δ₂ from the product-side orbit
    let delta2 = match (gamma, l.action_product) {
        (Some(g), Some(i)) => Some(g * i).filter(|d| d.is_finite() && *d > 0.0),
        _ => None,
    };
    let ln_ww = match (ln_kramers, delta, delta2) {
        (Some(k), Some(d1), Some(d2)) => Some(k + turnover::ln_well_to_well(d1, d2)),
        _ => None,
    };

    let g_over_wb = gamma.zip(l.omega_barrier).map(|(g, w)| g / w);
    let name = regime::classify(g_over_wb, delta);
    let high = eb >= LOW_BARRIER_KT;
    let over = name == RegimeName::Overdamped;
    let exp = |v: Option<f64>| v.map(f64::exp);
    let rates = Rates {
        tst: exp(ln_tst),
        tst_exact: exp(ln_tst_exact),
        kramers: exp(ln_kramers),
        smoluchowski: exp(ln_smol),
        energy_diffusion: exp(ln_ed),
        turnover: exp(ln_mm),
        mfpt: Some((-m.ln_time).exp()),
        grote_hynes: None,
        well_to_well: exp(ln_ww),
        pgh: exp(ln_pgh),
    };
    let low_note = "barrier below 5 kT: asymptotic formula unreliable";
    let pick = |ok: bool, good: &str, bad: &str| -> (bool, String) {
        if !high {
            (false, low_note.to_string())
        } else if ok {
            (true, good.to_string())
        } else {
            (false, bad.to_string())
        }
    };
    let d_ok = delta.is_some_and(|d| d >= DELTA_SPATIAL) || (over && delta.is_none());
    let mut rows = vec![
        RateRow {
            key: "tst",
            label: "harmonic TST",
            rate: rates.tst,
            valid: false,
            note: "upper bound: no recrossing, harmonic well".into(),
        },
        RateRow {
            key: "tst_exact",
            label: "exact 1-D TST",
            rate: rates.tst_exact,
            valid: false,
            note: "upper bound: no recrossing".into(),
        },
    ];
    let (v, n) = pick(
        d_ok,
        "holds: strong enough friction (delta >= 10)",
        "needs delta >= 10 (energy supply limits the rate here)",
    );
    rows.push(RateRow {
        key: "kramers",
        label: "Kramers (spatial diffusion)",
        rate: rates.kramers,
        valid: v && rates.kramers.is_some(),
        note: n,
    });
    let (v, n) = pick(
        over,
        if g_over_wb.is_some() {
            "holds: overdamped (gamma/omega_b >= 5)"
        } else {
            "holds: overdamped input (D only)"
        },
        "needs gamma/omega_b >= 5",
    );
    rows.push(RateRow {
        key: "smoluchowski",
        label: "Smoluchowski limit",
        rate: rates.smoluchowski,
        valid: v,
        note: n,
    });
    let (v, n) = pick(
        delta.is_some_and(|d| d < DELTA_ED_VALID),
        "holds: weak friction (delta < 0.02)",
        "needs delta < 0.02 (within ~12% of the turnover rate)",
    );
    rows.push(RateRow {
        key: "energy_diffusion",
        label: "energy diffusion (escape)",
        rate: rates.energy_diffusion,
        valid: v && rates.energy_diffusion.is_some(),
        note: n,
    });
    let (v, n) = pick(
        true,
        "holds at all frictions (finite-barrier error ~10% at weak friction)",
        "",
    );
    rows.push(RateRow {
        key: "turnover",
        label: "Mel'nikov-Meshkov (escape)",
        rate: rates.turnover,
        valid: v && rates.turnover.is_some(),
        note: n,
    });
    let (v, n) = pick(
        true,
        "holds at all frictions, Ohmic (finite-barrier error ~kT/E_b)",
        "",
    );
    rows.push(RateRow {
        key: "pgh",
        label: "Pollak-Grabert-Hanggi (escape)",
        rate: rates.pgh,
        valid: v && rates.pgh.is_some(),
        note: n,
    });
    let (v, n) = pick(
        true,
        "transitions between the wells (Mel'nikov 1991), not the first escape",
        "",
    );
    rows.push(RateRow {
        key: "well_to_well",
        label: "well-to-well (Mel'nikov)",
        rate: rates.well_to_well,
        valid: v && rates.well_to_well.is_some(),
        note: n,
    });
    rows.push(RateRow {
        key: "mfpt",
        label: "1/MFPT (exact overdamped)",
        rate: rates.mfpt,
        valid: over,
        note: if over {
            "exact for overdamped dynamics, any barrier".into()
        } else {
            "exact for the overdamped model only; inertia matters here".into()
        },
    });
    let has_product = l.product.is_some();
    for r in rows.iter_mut().filter(|r| r.rate.is_none()) {
        r.valid = false;
        r.note = if mass.is_none() {
            "needs particle.mass".into()
        } else if r.key == "well_to_well" && !has_product {
            "no product well (a metastable well has only an escape rate)".into()
        } else if r.key == "pgh" && gamma.is_some() && ln_kramers.is_some() {
            "the unstable mode's orbit could not be followed (see the warnings)".into()
        } else {
            "needs a friction".into()
        };
    }
    if diffusion.constant().is_none() {
        warnings.push(format!(
            "D depends on x: the Smoluchowski and friction-dependent rates use D at the barrier top, D(x_b) = {d_b:.4}; the MFPT uses D(x) exactly"
        ));
    }
    let trusted = rows.iter().filter(|r| r.valid).map(|r| r.key).collect();
    let mut t = TheoryReport {
        regime: RegimeReport {
            name,
            gamma_over_omega_barrier: g_over_wb,
            delta,
            barrier_kt: eb,
            trusted,
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
    if let Some(tau) = memory_time {
        apply_memory(&mut t, tau);
    }
    check_consistency(&mut t);
    t
}
