//! `observe` output: the library's [`ObservedReport`] (positions and times as in the files, in the
//! scenario's length and time units when one is given; energies in kT) with the unit names, kT in
//! the energy unit, and a summary of the profile in the energy unit: its range and the barrier
//! between the cores read off the histogram.
//!
//! The friction record (JSON key "friction") is the library's with the mass converted to the
//! scenario's mass unit (energy·time²/length² when the mass unit is "1"); "regime" is the
//! diagnosis of the scenario `--scenario-out` wrote, as `rate` would make it.
//!
//! The barrier estimate is the highest observed bin between the cores minus the lowest bin in
//! each core, with σ = hypot(σ_U(top), σ_U(minimum)) (the two bins' bootstrap errors taken as
//! independent). The highest of several noisy bins is biased upward by up to about its σ_U; a fit
//! (`rate` on the written profile) does not have that bias.

use crate::observe::free_energy::Bin;
use crate::observe::{FreeEnergy, Interval, ObservedReport, Window};
use crate::theory::RegimeReport;
use crate::units::{UnitNames, UnitSystem};
use serde::Serialize;

/// U from the lowest bin of a core to the highest bin between the cores.
#[derive(Debug, Clone, Serialize)]
pub struct BarrierSide {
    /// centre of the core's lowest bin
    pub minimum: f64,
    /// the barrier above it in the energy unit
    pub height: f64,
    /// the same in kT
    #[serde(rename = "height_kT")]
    pub height_kt: f64,
    /// its σ in kT (null when a bin has no σ_U)
    #[serde(rename = "sigma_kT")]
    pub sigma_kt: Option<f64>,
}

/// The barrier between the cores read off the histogram.
#[derive(Debug, Clone, Serialize)]
pub struct BarrierEstimate {
    /// centre of the highest bin between the cores
    pub x: f64,
    /// seen from core A
    pub from_a: BarrierSide,
    /// seen from core B
    pub from_b: BarrierSide,
    /// false when a bin between the cores was never visited (the barrier is then higher)
    pub complete: bool,
}

/// The profile in brief (JSON key "profile").
#[derive(Debug, Clone, Serialize)]
pub struct ProfileSummary {
    /// non-empty bins
    pub bins: usize,
    /// centre of the first bin
    pub x_min: f64,
    /// centre of the last bin
    pub x_max: f64,
    /// bin width
    pub bin_width: f64,
    /// highest U above the lowest, in the energy unit
    pub u_range: f64,
    /// the same in kT
    #[serde(rename = "u_range_kT")]
    pub u_range_kt: f64,
    /// null without a bin between the cores
    pub barrier: Option<BarrierEstimate>,
}

impl ProfileSummary {
    /// The summary of `fe` with cores `a`, `b`, energies converted by `u`.
    pub fn new(fe: &FreeEnergy, [a, b]: [Interval; 2], u: &UnitSystem) -> Option<Self> {
        let bins = &fe.bins;
        let (first, last) = (bins.first()?, bins.last()?);
        let lowest = bins.iter().map(|b| b.u).fold(f64::INFINITY, f64::min);
        let highest = bins.iter().map(|b| b.u).fold(f64::NEG_INFINITY, f64::max);
        let inside = |i: Interval| bins.iter().filter(move |b| i.lo <= b.x && b.x <= i.hi);
        let min_of = |i: Interval| inside(i).min_by(|p, q| p.u.total_cmp(&q.u));
        let gap = Interval {
            lo: a.hi.min(b.hi),
            hi: b.lo.max(a.lo),
        };
        let between: Vec<_> = bins
            .iter()
            .filter(|p| gap.lo < p.x && p.x < gap.hi)
            .collect();
        let barrier = match (
            between.iter().max_by(|p, q| p.u.total_cmp(&q.u)),
            min_of(a),
            min_of(b),
        ) {
            (Some(top), Some(ma), Some(mb)) => {
                let side = |m: &Bin| BarrierSide {
                    minimum: m.x,
                    height: u.energy_from_kt(top.u - m.u),
                    height_kt: top.u - m.u,
                    sigma_kt: top.sigma_u.zip(m.sigma_u).map(|(s, t)| s.hypot(t)),
                };
                // every grid bin with its centre in the gap was visited: no hole between
                // neighbours, none at either end
                let h = fe.bin_width;
                let complete = between.windows(2).all(|w| w[1].x - w[0].x < 1.5 * h)
                    && between.first().is_some_and(|p| p.x - gap.lo <= h)
                    && between.last().is_some_and(|p| gap.hi - p.x <= h);
                Some(BarrierEstimate {
                    x: top.x,
                    from_a: side(ma),
                    from_b: side(mb),
                    complete,
                })
            }
            _ => None,
        };
        Some(Self {
            bins: bins.len(),
            x_min: first.x,
            x_max: last.x,
            bin_width: fe.bin_width,
            u_range: u.energy_from_kt(highest - lowest),
            u_range_kt: highest - lowest,
            barrier,
        })
    }
}

/// The files `observe` wrote.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Written {
    /// the profile table
    pub profile: Option<String>,
    /// the scenario reading it
    pub scenario: Option<String>,
}

/// `observe` output.
#[derive(Debug, Clone, Serialize)]
pub struct ObserveReport {
    /// the scenario the units come from (not part of the JSON contract)
    #[serde(skip)]
    pub scenario: Option<String>,
    /// unit names ("1" and "kT" without a scenario)
    pub units: UnitNames,
    /// kT in the energy unit
    #[serde(rename = "kT")]
    pub kt: f64,
    /// everything the trajectories say (energies in kT)
    #[serde(flatten)]
    pub observed: ObservedReport,
    /// the profile in brief, in the energy unit (null without a bin)
    pub profile: Option<ProfileSummary>,
    /// the files written
    pub written: Written,
    /// the regime of the written scenario, with the observed friction (null without one)
    pub regime: Option<RegimeReport>,
    /// notes on the output (not about the data; those are in "warnings")
    pub notes: Vec<String>,
}

impl ObserveReport {
    /// From the analysis and the units of the scenario (reduced units without one).
    ///
    /// The friction's mass is converted with `u.mass_factor` (left in kT·time²/length² with a
    /// note when `u` has none).
    pub fn new(mut observed: ObservedReport, u: &UnitSystem, scenario: Option<String>) -> Self {
        let k = &observed.kinetics;
        let profile = ProfileSummary::new(&observed.free_energy, [k.core_a, k.core_b], u);
        let mut notes = Vec::new();
        if let Some(f) = &mut observed.friction {
            match u.mass_factor {
                Some(factor) => {
                    let m = &mut f.mass;
                    m.value /= factor;
                    m.se /= factor;
                    m.ci95 = m.ci95.map(|v| v / factor);
                }
                None => notes.push(
                    "the friction's mass is in kT·time²/length² (the units convert no mass)".into(),
                ),
            }
        }
        Self {
            scenario,
            units: u.names.clone(),
            kt: u.kt_in_energy_unit,
            observed,
            profile,
            written: Written::default(),
            regime: None,
            notes,
        }
    }
}

/// One restrained window in the output.
#[derive(Debug, Clone, Serialize)]
pub struct WindowOut {
    /// the spring constant in the energy unit per length²
    pub spring: f64,
    /// the file, the spring in kT/length² and D at the mean position
    #[serde(flatten)]
    pub window: Window,
}

/// `observe --spring` output: D at each restrained window's mean position (lengths and times
/// as in the files, D in length²/time).
#[derive(Debug, Clone, Serialize)]
pub struct WindowsReport {
    /// the scenario the units come from (not part of the JSON contract)
    #[serde(skip)]
    pub scenario: Option<String>,
    /// unit names
    pub units: UnitNames,
    /// kT in the energy unit
    #[serde(rename = "kT")]
    pub kt: f64,
    /// the windows, in the order given
    pub windows: Vec<WindowOut>,
    /// every window's warnings, each naming its file
    pub warnings: Vec<String>,
    /// notes on the output
    pub notes: Vec<String>,
}

impl WindowsReport {
    /// From the windows (springs in kT/length²) and the scenario's units.
    pub fn new(windows: Vec<Window>, u: &UnitSystem, scenario: Option<String>) -> Self {
        let warnings = windows
            .iter()
            .flat_map(|w| {
                w.diffusion
                    .warnings
                    .iter()
                    .map(move |m| format!("{}: {m}", w.trajectory.name))
            })
            .collect();
        Self {
            scenario,
            units: u.names.clone(),
            kt: u.kt_in_energy_unit,
            windows: windows
                .into_iter()
                .map(|w| WindowOut {
                    spring: u.energy_from_kt(w.spring_kt),
                    window: w,
                })
                .collect(),
            warnings,
            notes: vec![
                "restrained windows: no free energy or core-to-core kinetics (a spring holds the coordinate)".into(),
            ],
        }
    }
}
