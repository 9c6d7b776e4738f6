//! Reports: the result records of each command in the scenario's units, and their renderers
//! (`table` for people, `json` for scripts; contract in the README). Conversion from internal
//! units happens here and nowhere else: energies × kT-in-unit, actions × kT-in-unit; lengths,
//! times, frequencies and rates are already in the scenario's units.

pub mod json;
pub mod table;

use crate::landscape::{Kind, Landscape, TargetRule};
use crate::scenario::Model;
use crate::theory::{RateRow, Rates, RegimeReport, TheoryReport};
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
            stationary_points: l
                .points
                .iter()
                .map(|p| PointOut {
                    kind: p.kind,
                    x: p.x,
                    u: e(p.u),
                    u_kt: p.u,
                    curvature: e(p.curvature),
                })
                .collect(),
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
        }
    }
}
