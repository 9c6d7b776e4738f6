//! Records and tables of `survey` and `rate` on a two-coordinate scenario, in the scenario's
//! units: energies in units.energy (fields ending in `_kt` in kT), Hessians in
//! units.energy/units.length², lengths in units.length, times in units.time, rates per
//! units.time. The JSON carries `"dimension": 2`.

use super::table::num;
use crate::landscape::surface::{PathStep, StationaryPoint, SurfaceLandscape};
use crate::model::PlaneModel;
use crate::potential::surface::{Point, Sym2};
use crate::theory::Rates;
use crate::theory::fv2d::RefinementStep;
use crate::theory::plane::{PlaneRates, PlaneTheory, Region};
use crate::units::UnitNames;
use comfy_table::presets::UTF8_FULL_CONDENSED;
use comfy_table::{ContentArrangement, Table};
use serde::Serialize;
use std::fmt::Write as _;

/// A stationary point.
#[derive(Debug, Clone, Serialize)]
pub struct PointOut {
    /// x
    pub x: f64,
    /// y
    pub y: f64,
    /// U (units.energy)
    pub u: f64,
    /// U (kT)
    pub u_kt: f64,
    /// Hessian eigenvalues, ascending (units.energy/units.length²)
    pub eigenvalues: [f64; 2],
}

/// One elementary step minimum → saddle → minimum (indices into minima and saddles).
#[derive(Debug, Clone, Serialize)]
pub struct StepOut {
    /// the minimum before the saddle
    pub from: usize,
    /// the saddle
    pub saddle: usize,
    /// the minimum after it
    pub to: usize,
    /// U(saddle) − U(from) (units.energy)
    pub forward_barrier: f64,
    /// U(saddle) − U(to) (units.energy)
    pub backward_barrier: f64,
    /// the saddle's arc length along the MEP
    pub s: f64,
}

/// One MEP image.
#[derive(Debug, Clone, Serialize)]
pub struct MepPointOut {
    /// arc length from the reactant
    pub s: f64,
    /// x
    pub x: f64,
    /// y
    pub y: f64,
    /// U (units.energy)
    pub u: f64,
}

/// The MEP.
#[derive(Debug, Clone, Serialize)]
pub struct MepOut {
    /// images from the reactant to the product, equally spaced in arc length
    pub points: Vec<MepPointOut>,
    /// the largest force across the path at the end, relative to the largest |∇U| on it
    pub residual: f64,
    /// whether the string converged
    pub converged: bool,
}

/// The landscape of a surface.
#[derive(Debug, Clone, Serialize)]
pub struct PlaneLandscapeOut {
    /// minima, deepest first
    pub minima: Vec<PointOut>,
    /// index-1 saddles
    pub saddles: Vec<PointOut>,
    /// index of the reactant minimum
    pub reactant: usize,
    /// index of the product minimum
    pub product: usize,
    /// index of the rate-limiting saddle (the highest on the path)
    pub rate_limiting_saddle: usize,
    /// U(rate-limiting saddle) − U(reactant) (units.energy)
    pub barrier: f64,
    /// the same in kT
    pub barrier_kt: f64,
    /// U(rate-limiting saddle) − U(product) (units.energy)
    pub reverse_barrier: f64,
    /// the elementary steps along the MEP
    pub path: Vec<StepOut>,
    /// the minimum energy path
    pub mep: MepOut,
}

/// Scenario facts shared by both reports.
#[derive(Debug, Clone, Serialize)]
pub struct PlaneHeader {
    /// always 2
    pub dimension: u8,
    /// the scenario file
    pub source: String,
    /// its title
    pub title: Option<String>,
    /// the surface
    pub surface: String,
    /// unit names
    pub units: UnitNames,
    /// temperature (K) if given
    pub temperature: Option<f64>,
    /// kT in units.energy
    pub kt: f64,
}

/// `survey` on a surface.
#[derive(Debug, Clone, Serialize)]
pub struct PlaneSurveyReport {
    /// the scenario
    #[serde(flatten)]
    pub header: PlaneHeader,
    /// the landscape
    pub landscape: PlaneLandscapeOut,
    /// what a user should know about the surface (left out when empty)
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
}

/// The harmonic data over the rate-limiting saddle.
#[derive(Debug, Clone, Serialize)]
pub struct HarmonicOut {
    /// Hessian at the reactant (units.energy/units.length²)
    pub reactant_hessian: Sym2,
    /// Hessian at the rate-limiting saddle
    pub saddle_hessian: Sym2,
    /// |negative eigenvalue of D·H_b| (per units.time)
    pub unstable_rate: f64,
    /// its unit eigenvector
    pub unstable_direction: [f64; 2],
}

/// The MFPT refinement.
#[derive(Debug, Clone, Serialize)]
pub struct MfptOut {
    /// from (the reactant minimum)
    pub start: Point,
    /// the product region
    pub product_region: Region,
    /// T on the finest grid (units.time); null when the solve broke down
    pub time: Option<f64>,
    /// every grid with its T
    pub grids: Vec<RefinementStep>,
    /// relative change of T at the last refinement; null when the solve broke down
    pub last_change: Option<f64>,
    /// whether that is below `tolerance`
    pub converged: bool,
    /// the asked relative change
    pub tolerance: f64,
    /// the cell cap
    pub max_cells: usize,
    /// the observed order from the last three grids
    pub observed_order: Option<f64>,
    /// Richardson's estimate with that order
    pub extrapolated: Option<f64>,
}

/// The committor's TPT rate.
#[derive(Debug, Clone, Serialize)]
pub struct TptOut {
    /// cells along x of the grid (the finest MFPT grid)
    pub nx: usize,
    /// cells along y
    pub ny: usize,
    /// the reactant region A
    pub reactant_region: Region,
    /// ν_AB (per units.time)
    pub reactive_frequency: f64,
    /// π_A
    pub last_in_a: f64,
    /// k_AB = ν_AB/π_A (per units.time)
    pub rate: f64,
}

/// The one-coordinate projection along the MEP.
#[derive(Debug, Clone, Serialize)]
pub struct MepLineOut {
    /// the MEP tangent at the rate-limiting saddle
    pub tangent: [f64; 2],
    /// tᵀDt (units.length²/units.time)
    pub diffusion: f64,
    /// γ = kT/(m D) along the path (per units.time), with a mass
    pub friction: Option<f64>,
    /// the MEP length
    pub length: f64,
    /// the 1-D barrier (kT)
    pub barrier_kt: f64,
    /// the 1-D exact MFPT (units.time)
    pub mfpt_time: f64,
    /// the 1-D rates, keys as in a one-coordinate `rate`
    pub rates: Rates,
}

/// `rate` on a surface.
#[derive(Debug, Clone, Serialize)]
pub struct PlaneRateReport {
    /// the scenario
    #[serde(flatten)]
    pub header: PlaneHeader,
    /// the landscape
    pub landscape: PlaneLandscapeOut,
    /// harmonic data
    pub harmonic: HarmonicOut,
    /// rates per units.time
    pub rates: PlaneRates,
    /// the exact MFPT
    pub mfpt: MfptOut,
    /// the TPT rate (null when the solve broke down)
    pub tpt: Option<TptOut>,
    /// the 1-D projection along the MEP
    pub mep_1d: MepLineOut,
    /// what a user should know
    pub warnings: Vec<String>,
}

fn header(m: &PlaneModel) -> PlaneHeader {
    PlaneHeader {
        dimension: 2,
        source: m.source.clone(),
        title: m.title.clone(),
        surface: m.surface_label.clone(),
        units: m.units.names.clone(),
        temperature: m.units.temperature,
        kt: m.units.kt_in_energy_unit,
    }
}

fn landscape(m: &PlaneModel, l: &SurfaceLandscape) -> PlaneLandscapeOut {
    let e = m.units.kt_in_energy_unit;
    let point = |p: &StationaryPoint| PointOut {
        x: p.position[0],
        y: p.position[1],
        u: p.u * e,
        u_kt: p.u,
        eigenvalues: p.eigenvalues.map(|v| v * e),
    };
    let step = |s: &PathStep| StepOut {
        from: s.from,
        saddle: s.saddle,
        to: s.to,
        forward_barrier: s.forward_barrier * e,
        backward_barrier: s.backward_barrier * e,
        s: s.s,
    };
    PlaneLandscapeOut {
        minima: l.minima.iter().map(point).collect(),
        saddles: l.saddles.iter().map(point).collect(),
        reactant: l.reactant,
        product: l.product,
        rate_limiting_saddle: l.rate_limiting_saddle,
        barrier: l.barrier * e,
        barrier_kt: l.barrier,
        reverse_barrier: l.reverse_barrier * e,
        path: l.steps.iter().map(step).collect(),
        mep: MepOut {
            points: l
                .mep
                .points
                .iter()
                .map(|p| MepPointOut {
                    s: p.s,
                    x: p.position[0],
                    y: p.position[1],
                    u: p.u * e,
                })
                .collect(),
            residual: l.mep.residual,
            converged: l.mep.converged,
        },
    }
}

impl PlaneSurveyReport {
    /// The record of a surface's landscape.
    pub fn new(m: &PlaneModel, l: &SurfaceLandscape) -> Self {
        Self {
            header: header(m),
            landscape: landscape(m, l),
            warnings: m
                .notes
                .iter()
                .cloned()
                .chain(crate::theory::plane::surface_warnings(&m.system))
                .collect(),
        }
    }
}

impl PlaneRateReport {
    /// The record of a surface's rates.
    pub fn new(m: &PlaneModel, t: &PlaneTheory) -> Self {
        let e = m.units.kt_in_energy_unit;
        let h = &t.harmonic;
        let scaled = |s: Sym2| s.map(|r| r.map(|v| v * e));
        let p = &t.mep_1d;
        Self {
            header: header(m),
            landscape: landscape(m, &t.landscape),
            harmonic: HarmonicOut {
                reactant_hessian: scaled(h.reactant_hessian),
                saddle_hessian: scaled(h.saddle_hessian),
                unstable_rate: h.unstable_rate,
                unstable_direction: h.unstable_direction,
            },
            rates: t.rates,
            mfpt: MfptOut {
                start: t.mfpt.start,
                product_region: t.mfpt.product.clone(),
                time: t.mfpt.time,
                grids: t.mfpt.grids.clone(),
                last_change: t.mfpt.last_change,
                converged: t.mfpt.converged,
                tolerance: t.mfpt.options.tolerance,
                max_cells: t.mfpt.options.max_cells,
                observed_order: t.mfpt.observed_order,
                extrapolated: t.mfpt.extrapolated,
            },
            tpt: t.tpt.as_ref().map(|c| TptOut {
                nx: c.grid.nx,
                ny: c.grid.ny,
                reactant_region: c.reactant.clone(),
                reactive_frequency: c.reactive_frequency,
                last_in_a: c.last_in_a,
                rate: c.rate,
            }),
            mep_1d: MepLineOut {
                tangent: p.tangent,
                diffusion: p.diffusion,
                friction: p.friction,
                length: p.length,
                barrier_kt: p.barrier,
                mfpt_time: p.mfpt,
                rates: p.rates,
            },
            warnings: m.notes.iter().chain(&t.warnings).cloned().collect(),
        }
    }
}

fn table() -> Table {
    let mut t = Table::new();
    t.load_style(UTF8_FULL_CONDENSED)
        .set_content_arrangement(ContentArrangement::Dynamic)
        .set_width(110);
    t
}

fn opt(v: Option<f64>) -> String {
    v.map_or_else(|| "–".into(), num)
}

fn head(out: &mut String, h: &PlaneHeader) {
    if let Some(title) = &h.title {
        let _ = writeln!(out, "{title}");
    }
    let _ = write!(
        out,
        "scenario {} · two coordinates · {}",
        h.source, h.surface
    );
    match h.temperature {
        Some(t) => {
            let _ = writeln!(out, " · T = {t} K, kT = {} {}", num(h.kt), h.units.energy);
        }
        None => {
            let _ = writeln!(out, " · energies in {}", h.units.energy);
        }
    }
}

fn landscape_table(out: &mut String, l: &PlaneLandscapeOut, names: &UnitNames) {
    let energy = names.energy.as_str();
    let length = match names.length.as_str() {
        "1" => "L",
        l => l,
    };
    // a second energy column in kT only when the scenario's unit is not kT
    let in_kt = energy != "kT";
    let mut t = table();
    let mut h = vec![
        "point".to_string(),
        "x".into(),
        "y".into(),
        format!("U ({energy})"),
    ];
    if in_kt {
        h.push("U (kT)".into());
    }
    h.extend([
        format!("Hessian eigenvalues ({energy}/{length}²)"),
        "role".into(),
    ]);
    t.set_header(h);
    let on_path = |k: usize| l.path.iter().skip(1).any(|s| s.from == k);
    for (kind, pts) in [("minimum", &l.minima), ("saddle", &l.saddles)] {
        for (k, p) in pts.iter().enumerate() {
            let role = match kind {
                "minimum" if k == l.reactant => "reactant",
                "minimum" if k == l.product => "product",
                "minimum" if on_path(k) => "intermediate",
                "saddle" if k == l.rate_limiting_saddle => "rate-limiting",
                "saddle" if l.path.iter().any(|s| s.saddle == k) => "on the path",
                _ => "",
            };
            let mut row = vec![format!("{kind} {k}"), num(p.x), num(p.y), num(p.u)];
            if in_kt {
                row.push(num(p.u_kt));
            }
            row.extend([
                format!("{}, {}", num(p.eigenvalues[0]), num(p.eigenvalues[1])),
                role.to_string(),
            ]);
            t.add_row(row);
        }
    }
    let _ = writeln!(out, "{t}");
    let steps: Vec<String> = l
        .path
        .iter()
        .map(|s| {
            format!(
                "minimum {} → saddle {} → minimum {} (+{} / −{} {energy})",
                s.from,
                s.saddle,
                s.to,
                num(s.forward_barrier),
                num(s.backward_barrier)
            )
        })
        .collect();
    let _ = writeln!(out, "path: {}", steps.join("; "));
    let in_kt = if in_kt {
        format!(" = {} kT", num(l.barrier_kt))
    } else {
        String::new()
    };
    let _ = writeln!(
        out,
        "barrier {} {energy}{in_kt} over saddle {}; MEP of {} images, length {}, {}",
        num(l.barrier),
        l.rate_limiting_saddle,
        l.mep.points.len(),
        num(l.mep.points.last().map_or(0.0, |p| p.s)),
        if l.mep.converged {
            "converged"
        } else {
            "not converged"
        }
    );
}

/// Renders `survey` on a surface.
pub fn survey_table(r: &PlaneSurveyReport) -> String {
    let mut out = String::new();
    head(&mut out, &r.header);
    landscape_table(&mut out, &r.landscape, &r.header.units);
    for w in &r.warnings {
        let _ = writeln!(out, "warning: {w}");
    }
    out
}

/// Renders `rate` on a surface.
pub fn rate_table(r: &PlaneRateReport) -> String {
    let mut out = String::new();
    head(&mut out, &r.header);
    landscape_table(&mut out, &r.landscape, &r.header.units);
    let time = match r.header.units.time.as_str() {
        "1" => "time unit",
        t => t,
    };
    let mut t = table();
    t.set_header(vec![
        "rate".to_string(),
        format!("per {time}"),
        "two coordinates".into(),
    ]);
    let rt = &r.rates;
    let rows: [(&str, Option<f64>, &str); 5] = [
        (
            "Langer, overdamped",
            Some(rt.langer_overdamped),
            "harmonic, tensor D, over the rate-limiting saddle",
        ),
        (
            "Langer with inertia",
            rt.langer,
            "harmonic, mass and friction (needs particle.mass)",
        ),
        (
            "harmonic TST (Vineyard)",
            rt.harmonic_tst,
            "no recrossing (needs particle.mass)",
        ),
        (
            "1 / MFPT (exact, overdamped)",
            rt.mfpt,
            "finite volumes, refined grids",
        ),
        ("TPT (committor)", rt.tpt, "finite volumes, finest grid"),
    ];
    for (name, v, note) in rows {
        t.add_row(vec![name.to_string(), opt(v), note.to_string()]);
    }
    let _ = writeln!(out, "{t}");
    let m = &r.mfpt;
    let grids: Vec<String> = m
        .grids
        .iter()
        .map(|g| format!("{}x{}: {}", g.nx, g.ny, num(g.time)))
        .collect();
    if let (Some(time_value), Some(change)) = (m.time, m.last_change) {
        let _ = writeln!(
            out,
            "MFPT {} {time} from the reactant to the product region; grids {}; last change {:.1e} ({} {:.0e}, at most {} cells)",
            num(time_value),
            grids.join(", "),
            change,
            if m.converged { "below" } else { "above" },
            m.tolerance,
            m.max_cells
        );
    }
    let p = &r.mep_1d;
    let mut t = table();
    t.set_header(vec![
        "along the MEP (one coordinate)".to_string(),
        format!("per {time}"),
    ]);
    for (name, v) in [
        (
            "Smoluchowski (1-D Kramers, overdamped)",
            p.rates.smoluchowski,
        ),
        ("Kramers (1-D, with inertia)", p.rates.kramers),
        ("harmonic TST (1-D)", p.rates.tst),
        ("1 / MFPT (1-D exact)", p.rates.mfpt),
    ] {
        t.add_row(vec![name.to_string(), opt(v)]);
    }
    let _ = writeln!(out, "{t}");
    let _ = writeln!(
        out,
        "MEP profile: D along the path {}, barrier {} kT, 1-D MFPT {} {time}",
        num(p.diffusion),
        num(p.barrier_kt),
        num(p.mfpt_time)
    );
    for w in &r.warnings {
        let _ = writeln!(out, "warning: {w}");
    }
    out
}
