//! Reports: the result records of each command in the scenario's units, and their renderers
//! (`table` for people, `json` for scripts; contract in the README). Conversion from internal
//! units happens here and nowhere else: energies × kT-in-unit, actions × kT-in-unit; lengths,
//! times, frequencies and rates are already in the scenario's units.

pub mod csv;
pub mod json;
pub mod observe;
pub mod plane;
pub mod svg;
pub mod table;
pub mod vs_observed;

use crate::landscape::{Kind, Landscape, TargetRule};
use crate::model::Model;
use crate::theory::catalogue::{Band, Formula, Measures};
use crate::theory::{RateKey, RateRow, Rates, RegimeReport, TheoryReport};
use crate::units::{UnitNames, UnitSystem};
use serde::Serialize;

/// A stationary point in scenario units.
#[derive(Debug, Clone, Serialize)]
pub struct PointOut {
    /// "minimum" | "maximum"
    pub kind: Kind,
    /// position
    pub x: f64,
    /// U in the energy unit
    pub u: f64,
    /// U in kT
    #[serde(rename = "u_kT")]
    pub u_kt: f64,
    /// U'' in energy/length²
    pub curvature: f64,
}

impl PointOut {
    /// Converts from internal units.
    pub fn new(p: &crate::landscape::Stationary, u: &UnitSystem) -> Self {
        Self {
            kind: p.kind,
            x: p.x,
            u: u.energy_from_kt(p.u),
            u_kt: p.u,
            curvature: u.energy_from_kt(p.curvature),
        }
    }
}

/// The landscape in scenario units (JSON key "landscape").
#[derive(Debug, Clone, Serialize)]
pub struct LandscapeOut {
    /// x_a
    pub reactant: f64,
    /// x_b
    pub barrier: f64,
    /// product minimum
    pub product: Option<f64>,
    /// absorbing point
    pub target: f64,
    /// how the target was chosen
    pub target_rule: TargetRule,
    /// the reflecting wall behind the reactant
    pub wall: f64,
    /// E_b in the energy unit
    pub barrier_height: f64,
    /// E_b / kT
    #[serde(rename = "barrier_height_kT")]
    pub barrier_height_kt: f64,
    /// U(product) − U(reactant) in the energy unit
    pub reaction_energy: Option<f64>,
    /// ω_a, 1/time
    pub omega_reactant: Option<f64>,
    /// ω_b, 1/time
    pub omega_barrier: Option<f64>,
    /// U''(x_a), energy/length²
    pub curvature_reactant: f64,
    /// |U''(x_b)|, energy/length²
    pub curvature_barrier: f64,
    /// I_b, energy·time
    pub action: Option<f64>,
    /// product-side action at the barrier energy, energy·time
    pub action_product: Option<f64>,
    /// all interior stationary points
    pub stationary_points: Vec<PointOut>,
    /// stationary points of a noisy table's fit taken for noise (below the significance threshold)
    pub ignored_points: Vec<PointOut>,
    /// a table's fit: which spline, χ², effective degrees of freedom (null for formulas)
    pub fit: Option<crate::potential::FitSummary>,
}

impl LandscapeOut {
    /// Converts from internal units.
    pub fn new(l: &Landscape, u: &UnitSystem) -> Self {
        let e = |v: f64| u.energy_from_kt(v);
        Self {
            reactant: l.reactant,
            barrier: l.barrier,
            product: l.product,
            target: l.target,
            target_rule: l.target_rule,
            wall: l.wall,
            barrier_height: e(l.barrier_height),
            barrier_height_kt: l.barrier_height,
            reaction_energy: l.u_product.map(|p| e(p - l.u_reactant)),
            omega_reactant: l.omega_reactant,
            omega_barrier: l.omega_barrier,
            curvature_reactant: e(l.curvature_reactant),
            curvature_barrier: e(l.curvature_barrier),
            action: l.action.map(|a| u.action_from_internal(a)),
            action_product: l.action_product.map(|a| u.action_from_internal(a)),
            stationary_points: l.points.iter().map(|p| PointOut::new(p, u)).collect(),
            ignored_points: l.ignored.iter().map(|p| PointOut::new(p, u)).collect(),
            fit: l.fit.clone(),
        }
    }
}

/// Hopping between neighbouring minima in scenario units (JSON key "periodic.hopping").
#[derive(Debug, Clone, Serialize)]
pub struct HoppingOut {
    /// the hopping analysis (positions, rates, π₊, MFPT; energies in kT)
    #[serde(flatten)]
    pub kt: crate::theory::periodic::Hopping,
    /// ΔU₊ in the energy unit
    pub barrier_forward_energy: f64,
    /// ΔU₋ in the energy unit
    pub barrier_backward_energy: f64,
}

/// A periodic landscape's drift, diffusion and hopping in scenario units (JSON key "periodic").
#[derive(Debug, Clone, Serialize)]
pub struct PeriodicOut {
    /// period L
    pub period: f64,
    /// start of the base period
    pub origin: f64,
    /// tilt F in energy/length (U = V − F x)
    pub tilt: f64,
    /// tilt in kT/length
    #[serde(rename = "tilt_kT")]
    pub tilt_kt: f64,
    /// exact overdamped drift velocity (Stratonovich), length/time
    pub drift: f64,
    /// its linear-response estimate D_LJ·F/kT
    pub drift_linear: f64,
    /// effective diffusion coefficient (Reimann et al. 2001; Lifson–Jackson untilted)
    pub effective_diffusion: Option<f64>,
    /// Lifson–Jackson coefficient of the untilted profile
    pub effective_diffusion_untilted: f64,
    /// hopping rates out of the reactant minimum (null past the critical tilt)
    pub hopping: Option<HoppingOut>,
}

impl PeriodicOut {
    /// Converts from internal units.
    pub fn new(p: &crate::theory::periodic::PeriodicTheory, u: &UnitSystem) -> Self {
        Self {
            period: p.period,
            origin: p.origin,
            tilt: u.energy_from_kt(p.tilt),
            tilt_kt: p.tilt,
            drift: p.drift,
            drift_linear: p.drift_linear,
            effective_diffusion: p.effective_diffusion,
            effective_diffusion_untilted: p.effective_diffusion_untilted,
            hopping: p.hopping.as_ref().map(|h| HoppingOut {
                kt: h.clone(),
                barrier_forward_energy: u.energy_from_kt(h.barrier_forward),
                barrier_backward_energy: u.energy_from_kt(h.barrier_backward),
            }),
        }
    }
}

/// `rate` output for a periodic landscape past its critical tilt: no well, so no rates; the
/// drift and effective diffusion of the running state.
#[derive(Debug, Clone, Serialize)]
pub struct RunningReport {
    /// scenario facts (not part of the JSON contract)
    #[serde(skip)]
    pub header: Header,
    /// unit names
    pub units: UnitNames,
    /// drift and effective diffusion (hopping is null)
    pub periodic: PeriodicOut,
    /// warnings
    pub warnings: Vec<String>,
}

impl RunningReport {
    /// From a model and its periodic analysis.
    pub fn new(m: &Model, p: &crate::theory::periodic::PeriodicTheory) -> Self {
        Self {
            header: Header::new(m),
            units: m.units.names.clone(),
            periodic: PeriodicOut::new(p, &m.units),
            warnings: p.warnings.clone(),
        }
    }
}

/// Scenario facts shown in headers.
#[derive(Debug, Clone, Serialize)]
pub struct Header {
    /// file
    pub source: String,
    /// title
    pub title: Option<String>,
    /// the potential
    pub potential: String,
    /// temperature in K
    pub temperature: Option<f64>,
    /// kT in the energy unit
    #[serde(rename = "kT")]
    pub kt: f64,
}

impl Header {
    /// From a model.
    pub fn new(m: &Model) -> Self {
        Self {
            source: m.source.clone(),
            title: m.title.clone(),
            potential: m.potential_label.clone(),
            temperature: m.units.temperature,
            kt: m.units.kt_in_energy_unit,
        }
    }
}

/// `survey` output.
#[derive(Debug, Clone, Serialize)]
pub struct SurveyReport {
    /// scenario facts (not part of the JSON contract)
    #[serde(skip)]
    pub header: Header,
    /// unit names
    pub units: UnitNames,
    /// landscape
    pub landscape: LandscapeOut,
    /// warnings about the profile
    pub warnings: Vec<String>,
}

/// `rate` output.
#[derive(Debug, Clone, Serialize)]
pub struct RateReport {
    /// scenario facts (not part of the JSON contract)
    #[serde(skip)]
    pub header: Header,
    /// unit names
    pub units: UnitNames,
    /// landscape
    pub landscape: LandscapeOut,
    /// regime
    pub regime: RegimeReport,
    /// rates per time unit
    pub rates: Rates,
    /// exact overdamped MFPT, in the time unit
    pub mfpt_time: f64,
    /// rates with validity
    pub formulas: Vec<RateRow>,
    /// γ used, per time unit
    pub friction: Option<f64>,
    /// D at the barrier top, length²/time
    pub diffusion_barrier: f64,
    /// A(δ)
    pub depopulation: Option<f64>,
    /// the PGH energy loss Δ/kT and Υ = A(Δ/kT)
    pub pgh: Option<crate::theory::PghReport>,
    /// periodic landscapes: drift, effective diffusion, hopping rates
    pub periodic: Option<PeriodicOut>,
    /// intervals of every rate from the profile's sigma_U (tables with that column)
    pub uncertainty: Option<crate::uncertainty::UncertaintyReport>,
}

impl SurveyReport {
    /// From a model and its landscape.
    pub fn new(m: &Model, l: &Landscape) -> Self {
        Self {
            header: Header::new(m),
            units: m.units.names.clone(),
            landscape: LandscapeOut::new(l, &m.units),
            warnings: l.warnings.clone(),
        }
    }
}

impl RateReport {
    /// From a model and its theory.
    pub fn new(m: &Model, t: &TheoryReport) -> Self {
        Self {
            header: Header::new(m),
            units: m.units.names.clone(),
            landscape: LandscapeOut::new(&t.landscape, &m.units),
            regime: t.regime.clone(),
            rates: t.rates,
            mfpt_time: t.mfpt.time,
            formulas: t.rows.clone(),
            friction: t.friction,
            diffusion_barrier: t.diffusion_barrier,
            depopulation: t.depopulation,
            pgh: t.pgh,
            periodic: t.periodic.as_ref().map(|p| PeriodicOut::new(p, &m.units)),
            uncertainty: None,
        }
    }
}

/// The simulation record (JSON key "simulation"), made by [`crate::simulate::session`].
pub use crate::simulate::SimulationResult;

/// One theory against the simulation.
#[derive(Debug, Clone, Serialize)]
pub struct ComparisonRow {
    /// the theory's key
    pub method: RateKey,
    /// its readable name
    pub label: &'static str,
    /// its rate
    pub rate: Option<f64>,
    /// which simulated rate it is set against: "escape" (first passage to the target),
    /// "well-to-well" (counted transitions) or "none" (a well-to-well rate with no transition count)
    pub against: &'static str,
    /// theory / simulation
    pub ratio_to_simulation: Option<f64>,
    /// the ratio's 95% interval (from the simulation's)
    pub ratio_ci95: Option<[f64; 2]>,
    /// whether the theory holds in this regime
    pub valid: bool,
    /// whether the theory rate lies inside the simulation's 95% interval
    pub agrees: bool,
    /// the range [low, high] of theory/simulation allowed by the theory's documented accuracy
    /// (high is null for an upper bound such as TST)
    pub accuracy_band: (f64, Option<f64>),
    /// whether the ratio's 95% interval meets that range
    pub consistent: bool,
}

pub use crate::theory::accuracy_band;

/// The comparison rows and a one-line verdict.
pub fn compare_rows(
    t: &[RateRow],
    sim: &SimulationResult,
    barrier_kt: f64,
) -> (Vec<ComparisonRow>, String) {
    let rows: Vec<ComparisonRow> = t
        .iter()
        .map(|r| {
            // a well-to-well rate is set against counted transitions, never against the escape
            let (against, k_sim, [lo, hi]) = match Formula::of(r.key).measures {
                Measures::WellToWell => match &sim.well_to_well {
                    Some(w) => ("well-to-well", w.rate, w.rate_ci95),
                    None => ("none", 0.0, [0.0, f64::INFINITY]),
                },
                Measures::Escape => ("escape", sim.rate, sim.rate_ci95),
            };
            let rate = r.rate.filter(|_| against != "none");
            let ratio = rate.filter(|_| k_sim > 0.0).map(|k| k / k_sim);
            let ci = rate
                .filter(|_| lo > 0.0 && hi.is_finite())
                .map(|k| [k / hi, k / lo]);
            let band = accuracy_band(r.key, barrier_kt);
            // the ratio's interval [k/hi, k/lo] meets the allowed range
            let consistent = rate.is_some_and(|k| {
                k > 0.0 && k / lo >= band.0 && band.1.is_none_or(|top| k / hi <= top)
            });
            ComparisonRow {
                method: r.key,
                label: r.label,
                rate: r.rate,
                against,
                ratio_to_simulation: ratio,
                ratio_ci95: ci,
                valid: r.valid,
                agrees: rate.is_some_and(|k| k >= lo && k <= hi),
                accuracy_band: band,
                consistent,
            }
        })
        .collect();
    // only theories the table marks as holding here count: one inside the interval outside its
    // regime (or an upper bound such as TST) agrees by chance
    let agree: Vec<&str> = rows
        .iter()
        .filter(|r| r.agrees && r.valid)
        .map(|r| r.method.as_str())
        .collect();
    let upper_bound = |k: RateKey| Formula::of(k).band == Band::UpperBound;
    let fits: Vec<&str> = rows
        .iter()
        .filter(|r| r.consistent && !r.agrees && r.valid && !upper_bound(r.method))
        .map(|r| r.method.as_str())
        .collect();
    let verdict = if sim.rate <= 0.0 {
        "no escapes were simulated: no verdict (raise max_time or trajectories)".to_string()
    } else {
        let inside = if agree.is_empty() {
            "no theory that holds here lies within the simulation's 95% interval".to_string()
        } else {
            format!("within the simulation's 95% interval: {}", agree.join(", "))
        };
        if fits.is_empty() {
            inside
        } else {
            format!(
                "{inside}; within the documented accuracy (finite-barrier corrections ~kT/E_b): {}",
                fits.join(", ")
            )
        }
    };
    (rows, verdict)
}

/// `simulate` output.
#[derive(Debug, Clone, Serialize)]
pub struct SimulateReport {
    /// scenario facts
    #[serde(skip)]
    pub header: Header,
    /// unit names
    pub units: UnitNames,
    /// landscape
    pub landscape: LandscapeOut,
    /// the simulation
    pub simulation: SimulationResult,
}

/// `compare` output: everything of `rate` plus the simulation and the comparison.
#[derive(Debug, Clone, Serialize)]
pub struct CompareReport {
    /// the analytic part
    #[serde(flatten)]
    pub theory: RateReport,
    /// the simulation
    pub simulation: SimulationResult,
    /// theory against simulation
    pub comparison: Vec<ComparisonRow>,
    /// one line naming the theories that agree
    pub verdict: String,
    /// observed trajectories against theory and simulation (`compare --observed`; the key is
    /// left out without them)
    #[serde(skip_serializing_if = "Option::is_none")]
    pub observed: Option<vs_observed::ObservedComparison>,
}

/// `merge` output.
#[derive(Debug, Clone, Serialize)]
pub struct MergeReport {
    /// run fingerprint
    pub fingerprint: String,
    /// seed
    pub seed: u64,
    /// trajectories of the whole run
    pub trajectories: u64,
    /// trajectories in the files
    pub recorded: u64,
    /// true when every index of the run is present
    pub complete: bool,
    /// time step
    pub dt: f64,
    /// the scenario's time unit of dt, rates and times ("1" reduced; null for files written before
    /// it was recorded)
    pub time_unit: Option<String>,
    /// statistics of the union
    pub summary: crate::stats::Summary,
    /// warnings
    pub warnings: Vec<String>,
}

impl MergeReport {
    /// From merged records.
    pub fn new(c: &crate::simulate::records::Contents, s: crate::stats::Summary) -> Self {
        let recorded = c.outcomes.len() as u64;
        let mut warnings = c.warnings.clone();
        warnings.extend(s.warnings.iter().cloned());
        if recorded < c.header.trajectories {
            warnings.push(format!(
                "{} of {} trajectories recorded: the run is incomplete",
                recorded, c.header.trajectories
            ));
        }
        Self {
            fingerprint: format!("{:016x}", c.header.fingerprint),
            seed: c.header.seed,
            trajectories: c.header.trajectories,
            recorded,
            complete: recorded == c.header.trajectories,
            dt: c.header.dt,
            time_unit: c.header.time_unit.clone(),
            summary: s,
            warnings,
        }
    }
}
