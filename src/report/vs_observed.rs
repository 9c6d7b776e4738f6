//! Observed trajectories beside a model (`compare --observed`): which observed core-to-core rate
//! the model's escape rates correspond to, and a verdict on observed | theory | simulated.
//!
//! What the observed rate is. With transition-based (core-set) assignment (Buchete & Hummer,
//! J. Phys. Chem. B 112, 6057 (2008)) every moment belongs to the core visited last, so the time
//! T_A assigned to core A runs from entering A (arriving from B) to first entering B, and
//! k_AB = n_AB / T_A is the inverse of the mean of those periods: the mean first-passage time from
//! core A to the near edge of core B (Hummer, J. Chem. Phys. 120, 516 (2004)). Above a barrier of
//! a few kT the start inside A is forgotten long before the escape, so 1/k_AB is the MFPT from A's
//! minimum to B's near edge. The model's rates are escapes from its reactant minimum to its
//! target; with the target inside core B (the product minimum, as the scenario `observe` writes
//! has it) the two differ only by the downhill time from B's edge to the target, small against the
//! escape time. A target short of B's near edge (e.g. 10 kT below the barrier on a metastable
//! profile) or past B's far edge measures another first passage: a warning gives the model's exact
//! overdamped 1/MFPT to B's near edge beside its rate to the target (Gardiner, Handbook of
//! Stochastic Methods, Sec. 5.2).
//!
//! Matching: the observed direction starts in the core that contains the model's reactant minimum
//! (or lies nearest to it); the other core is the arrival core.
//!
//! Verdict (common practice, no source):
//! - observed vs simulated: z = (ln k_sim − ln k_obs) / sqrt(s_obs² + s_sim² + s_U²), each s the
//!   standard error of ln k read off a 95% interval as (ln hi − ln lo)/(2·1.96), s_U that of the
//!   model's 1/MFPT from the profile's σ_U (tables with that column; the simulated model inherits
//!   the profile's error). |z| ≤ 1.96 agrees. The simulated rate is the counted well-to-well rate
//!   when the simulation has one (the observed rate is one), else the escape rate.
//! - observed vs each theory, as `compare_rows` sets theory against simulation: the ratio
//!   theory/observed with its interval [k_lo/hi, k_hi/lo] (observed 95% interval [lo, hi]; the
//!   theory's own 95% interval from σ_U where there is one, else its value) must meet the
//!   formula's accuracy band ([`crate::theory::accuracy_band`]). Only theories that hold here and
//!   are not upper bounds count in the verdict.

use super::SimulationResult;
use crate::observe::{Interval, ObservedReport};
use crate::system::System;
use crate::theory::catalogue::{Band, Formula};
use crate::theory::{RateKey, TheoryReport, accuracy_band, mfpt};
use crate::uncertainty::UncertaintyReport;
use serde::Serialize;

/// The normal 97.5% point: a 95% interval is ±1.96 standard errors.
pub const Z95: f64 = 1.959_963_984_540_054;

/// The observed rate against the simulated one.
#[derive(Debug, Clone, Serialize)]
pub struct VsSimulation {
    /// "escape" or "well-to-well": which simulated rate
    pub against: &'static str,
    /// the simulated rate
    pub rate: f64,
    /// its 95% interval
    pub rate_ci95: [f64; 2],
    /// simulated / observed
    pub ratio_to_observed: f64,
    /// standard error of ln k from the profile's σ_U (null without a sigma_U column)
    pub profile_se_ln_k: Option<f64>,
    /// z on ln k (see the module doc)
    pub z: f64,
    /// whether the two 95% intervals overlap
    pub intervals_overlap: bool,
    /// |z| ≤ 1.96
    pub agrees: bool,
}

/// One theory rate against the observed rate.
#[derive(Debug, Clone, Serialize)]
pub struct VsTheory {
    /// the theory's key
    pub method: RateKey,
    /// its readable name
    pub label: &'static str,
    /// its rate (null where it does not apply)
    pub rate: Option<f64>,
    /// its 95% interval from the profile's σ_U (null without one)
    pub rate_ci95: Option<[f64; 2]>,
    /// theory / observed
    pub ratio_to_observed: Option<f64>,
    /// that ratio's 95% interval
    pub ratio_ci95: Option<[f64; 2]>,
    /// whether the theory holds in this regime
    pub valid: bool,
    /// whether the theory rate lies inside the observed 95% interval
    pub agrees: bool,
    /// the allowed range of theory/observed from the formula's documented accuracy
    pub accuracy_band: (f64, Option<f64>),
    /// whether the ratio's interval meets that range
    pub consistent: bool,
}

/// The observed part of `compare` (JSON key "observed").
#[derive(Debug, Clone, Serialize)]
pub struct ObservedComparison {
    /// the trajectory files
    pub files: Vec<String>,
    /// samples over all files
    pub samples: u64,
    /// total observed time
    pub total_time: f64,
    /// "A → B" or "B → A": the direction set against the model's escape
    pub direction: &'static str,
    /// the core the direction leaves (holding or nearest the model's reactant)
    pub core_from: Interval,
    /// the core it arrives in
    pub core_to: Interval,
    /// how the cores were chosen
    pub core_rule: String,
    /// transitions counted in that direction
    pub transitions: u64,
    /// time assigned to the core left (the total dwell time there)
    pub exposure: f64,
    /// n / T; null without a transition
    pub rate: Option<f64>,
    /// exact Poisson 95% interval; null without a transition
    pub rate_ci95: Option<[f64; 2]>,
    /// without a transition: the 95% upper bound of the rate
    pub upper95: Option<f64>,
    /// relative change of the rate when the cores are shrunk and grown
    pub boundary_spread: Option<f64>,
    /// the model's exact overdamped 1/MFPT from its reactant to the arrival core's near edge
    /// (what the observed rate measures; null when that edge is not past the barrier)
    pub model_rate_to_core_edge: Option<f64>,
    /// the simulated rate against the observed one (null without both)
    pub simulation: Option<VsSimulation>,
    /// every theory rate against the observed one
    pub theories: Vec<VsTheory>,
    /// one line: does the model reproduce the observed rate
    pub verdict: String,
    /// about the match of cores to the model, and the observed analysis's own warnings
    pub warnings: Vec<String>,
}

/// Distance from x to an interval (0 inside).
fn distance(x: f64, c: Interval) -> f64 {
    (c.lo - x).max(x - c.hi).max(0.0)
}

/// Standard error of ln k from a 95% interval (None when it has no positive finite ends).
fn se_ln(ci: [f64; 2]) -> Option<f64> {
    (ci[0] > 0.0 && ci[1].is_finite()).then(|| (ci[1] / ci[0]).ln() / (2.0 * Z95))
}

/// Sets the observed rate beside the model's theory and simulation (see the module doc).
/// Positions and times of `obs` are in the scenario's units, as the model's.
pub fn compare_observed(
    obs: &ObservedReport,
    system: &System,
    t: &TheoryReport,
    uncertainty: Option<&UncertaintyReport>,
    sim: Option<&SimulationResult>,
) -> ObservedComparison {
    let k = &obs.kinetics;
    let l = &t.landscape;
    let mut warnings = Vec::new();
    let cores = [("A", k.core_a), ("B", k.core_b)];
    // the starting core holds or lies nearest the reactant minimum
    let from = usize::from(distance(l.reactant, k.core_b) < distance(l.reactant, k.core_a));
    let to = 1 - from;
    let ((name_from, core_from), (name_to, core_to)) = (cores[from], cores[to]);
    let (rate, direction, spread) = if from == 0 {
        (&k.forward, "A → B", k.boundary.forward_spread)
    } else {
        (&k.backward, "B → A", k.boundary.backward_spread)
    };
    let hint = if k.core_rule == "given" {
        ""
    } else {
        " (cores placed from the observed free energy; --cores places them)"
    };
    let d = distance(l.reactant, core_from);
    if d > 0.0 {
        warnings.push(format!(
            "the model's reactant minimum x = {:.6e} lies outside both observed cores; the nearest is {name_from} [{:.6e}, {:.6e}], {d:.3e} away{hint}",
            l.reactant, core_from.lo, core_from.hi
        ));
    }
    // the arrival core's near edge faces the starting core (A lies at smaller x)
    let (near, far) = if to == 1 {
        (core_to.lo, core_to.hi)
    } else {
        (core_to.hi, core_to.lo)
    };
    let s = if to == 1 { 1.0 } else { -1.0 };
    let model_rate_to_core_edge = (s * (near - l.barrier) > 0.0 && s * l.direction > 0.0)
        .then(|| {
            let extra = [l.barrier];
            let m = mfpt::mfpt(
                &system.potential,
                &system.diffusion,
                l.wall,
                l.reactant,
                near,
                &extra,
            );
            1.0 / m.time
        })
        .filter(|v| v.is_finite() && *v > 0.0);
    let exact = t
        .rows
        .iter()
        .find(|r| r.key == RateKey::Mfpt)
        .and_then(|r| r.rate);
    let edge_note = match (model_rate_to_core_edge, exact) {
        (Some(e), Some(x)) => format!(
            "; the model's exact overdamped 1/MFPT is {e:.4e} to x = {near:.6e} and {x:.4e} to its target ({:.3}×)",
            e / x
        ),
        _ => String::new(),
    };
    if distance(l.target, core_from) < distance(l.target, core_to) {
        warnings.push(format!(
            "the model's reactant (x = {:.6e}) and target (x = {:.6e}) both lie nearest core {name_from}: its escape does not lead to core {name_to}, so its rates measure something else than the observed {direction} rate{hint}",
            l.reactant, l.target
        ));
    } else if s * (l.target - near) < 0.0 {
        warnings.push(format!(
            "the model's target x = {:.6e} lies short of core {name_to}'s near edge x = {near:.6e}: the model's rates count the first passage to its target, the observed rate the arrival in core {name_to}{edge_note}{hint}",
            l.target
        ));
    } else if s * (l.target - far) > 0.0 {
        warnings.push(format!(
            "the model's target x = {:.6e} lies past core {name_to}'s far edge x = {far:.6e}: the model's rates count the first passage there, the observed rate the arrival in core {name_to}{edge_note}{hint}",
            l.target
        ));
    }
    warnings.extend(obs.warnings.iter().cloned());

    let band_kt = l.barrier_height;
    let sigma = |key: RateKey| {
        uncertainty.and_then(|u| {
            u.rates
                .iter()
                .find(|i| i.key == key.as_str())
                .map(|i| i.ci95)
        })
    };
    let theories: Vec<VsTheory> = t
        .rows
        .iter()
        .map(|r| {
            let ci = r.rate.and(sigma(r.key));
            let band = accuracy_band(r.key, band_kt);
            let (ratio, ratio_ci, agrees, consistent) = match (r.rate, rate.rate, rate.ci95) {
                (Some(kt), Some(ko), Some([lo, hi])) if kt > 0.0 => {
                    let [tl, th] = ci.unwrap_or([kt, kt]);
                    let rc = [tl / hi, th / lo];
                    let meets = rc[1] >= band.0 && band.1.is_none_or(|top| rc[0] <= top);
                    (Some(kt / ko), Some(rc), kt >= lo && kt <= hi, meets)
                }
                _ => (None, None, false, false),
            };
            VsTheory {
                method: r.key,
                label: r.label,
                rate: r.rate,
                rate_ci95: ci,
                ratio_to_observed: ratio,
                ratio_ci95: ratio_ci,
                valid: r.valid,
                agrees,
                accuracy_band: band,
                consistent,
            }
        })
        .collect();

    let simulation = match (sim, rate.rate, rate.ci95) {
        (Some(sim), Some(ko), Some(oci)) => {
            let (against, ks, sci) = match &sim.well_to_well {
                Some(w) if w.rate > 0.0 => ("well-to-well", w.rate, w.rate_ci95),
                _ => ("escape", sim.rate, sim.rate_ci95),
            };
            let profile_se = sigma(RateKey::Mfpt).and_then(se_ln);
            match (ks > 0.0, se_ln(oci), se_ln(sci)) {
                (true, Some(so), Some(ss)) => {
                    let se = (so * so + ss * ss + profile_se.unwrap_or(0.0).powi(2)).sqrt();
                    let z = (ks / ko).ln() / se;
                    Some(VsSimulation {
                        against,
                        rate: ks,
                        rate_ci95: sci,
                        ratio_to_observed: ks / ko,
                        profile_se_ln_k: profile_se,
                        z,
                        intervals_overlap: sci[0] <= oci[1] && oci[0] <= sci[1],
                        agrees: z.abs() <= Z95,
                    })
                }
                _ => None,
            }
        }
        _ => None,
    };

    let verdict = verdict(rate, direction, name_from, simulation.as_ref(), &theories);
    ObservedComparison {
        files: obs.trajectories.iter().map(|f| f.name.clone()).collect(),
        samples: obs.samples,
        total_time: obs.total_time,
        direction,
        core_from,
        core_to,
        core_rule: k.core_rule.clone(),
        transitions: rate.transitions,
        exposure: rate.exposure,
        rate: rate.rate,
        rate_ci95: rate.ci95,
        upper95: rate.upper95,
        boundary_spread: spread,
        model_rate_to_core_edge,
        simulation,
        theories,
        verdict,
        warnings,
    }
}

/// The one-line verdict (see the module doc).
fn verdict(
    rate: &crate::observe::kinetics::Rate,
    direction: &str,
    core: &str,
    sim: Option<&VsSimulation>,
    theories: &[VsTheory],
) -> String {
    let Some(ko) = rate.rate else {
        return match rate.upper95 {
            Some(up) => format!(
                "no {direction} transition in the trajectories: no observed rate (k < {up:.4e} at 95%), so no verdict; observe longer or check the cores"
            ),
            None => format!(
                "core {core} was never visited: no observed {direction} rate, so no verdict; check the cores"
            ),
        };
    };
    let holds: Vec<&str> = theories
        .iter()
        .filter(|r| r.consistent && r.valid && Formula::of(r.method).band != Band::UpperBound)
        .map(|r| r.method.as_str())
        .collect();
    let theory_part = if holds.is_empty() {
        "no theory that holds here is consistent with the observed rate".to_string()
    } else {
        format!("consistent with the observed rate: {}", holds.join(", "))
    };
    match sim {
        Some(s) if s.agrees => format!(
            "the model reproduces the observed {direction} rate {ko:.4e} (simulated/observed = {:.3}, z = {:.2}); {theory_part}",
            s.ratio_to_observed, s.z
        ),
        Some(s) => format!(
            "the model's rate is {:.3}× the observed {direction} rate {ko:.4e} (z = {:.2}): the profile or D/γ does not describe the data; {theory_part}",
            s.ratio_to_observed, s.z
        ),
        None => format!(
            "no simulated rate to set against the observed {direction} rate {ko:.4e}; {theory_part}"
        ),
    }
}
