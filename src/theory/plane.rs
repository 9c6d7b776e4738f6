//! The rates of a two-coordinate system ([`PlaneSystem`]), kT = 1: the landscape
//! ([`analyse_surface`]), the harmonic rates over the rate-limiting saddle ([`super::langer`]:
//! overdamped Langer with D, Langer with inertia and Vineyard's harmonic TST with a mass), the
//! exact overdamped MFPT from the reactant minimum to the product region on refined
//! finite-volume grids ([`super::fv2d`]) and its inverse, the transition-path-theory rate from the
//! committor on the finest of those grids, and the one-coordinate projection along the MEP (what
//! a 1-D analysis of U(s) along the path would give) through the crate's 1-D theory.
//!
//! **Regions.** The product region B is, by default, the half-plane beyond the product minimum
//! m_B, facing away from the path, {p : (p − m_B)·t_B ≥ 0} with t_B the MEP's unit tangent at its
//! product end, restricted to the points nearer m_B than any other minimum (so it never reaches
//! into another basin). On a separable surface U₁(x) + U₂(y) this is x ≥ x_B, where the 2-D MFPT
//! equals the 1-D MFPT to x_B exactly (the backward equation separates). The reactant region A of
//! the committor is the mirror rule at the reactant minimum. With `product_radius` r both are
//! disks of radius r around their minima.
//!
//! **MEP projection.** U(s) along the MEP's arc length s, continued beyond each end minimum
//! along the path's end tangent on the real surface, out to the box wall, a forbidden point or
//! the first point where U falls (a ridge: the profile never enters another basin), so that the
//! end minima are interior minima of a 1-D profile and each well is whole. On a separable
//! surface U₁(x) + U₂(y) this is U₁ on the whole box, and the 1-D MFPT equals the 2-D one.
//! Where an end minimum has no room (it sits on the wall or the next step falls) the profile is
//! mirrored there up to the first or last saddle (U(−s) = U(s)). One embedding for the
//! transport coefficients, with t the MEP's tangent at the rate-limiting saddle: the friction
//! matrix ζ = kT D⁻¹, ζ_s = tᵀζt, D_s = kT/ζ_s, m_s = tᵀMt and γ_s = ζ_s/m_s (= γ for one
//! friction rate, D = kT/(m_i γ)). The 1-D MFPT goes from s = 0 to the product minimum's s
//! with reflecting walls at the profile's ends.

use super::fv2d::{Fv2dError, Generator, Grid, MfptStudy, RefinementStep, mfpt_refined};
use super::langer::{HarmonicBarrier, LangerError, unstable_overdamped};
use super::{Rates, TheoryError};
use crate::landscape::surface::{SurfaceLandscape, SurfaceLandscapeError, analyse_surface};
use crate::potential::surface::{DiffusionTensor, Point, Surface, Sym2};
use crate::potential::table::{Columns, Table};
use crate::potential::{AnyPotential, Diffusion};
use crate::system::{PlaneSurface, PlaneSystem, System};
use serde::Serialize;
use thiserror::Error;

/// Settings of the MFPT refinement: the first grid's spacing (as a fraction of the box's shorter
/// side), the relative change that ends it, and the cell cap that keeps `rate` fast.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PlaneOptions {
    /// first grid spacing / shorter box side
    pub first_spacing: f64,
    /// refinement ends when T changes by less than this (relative)
    pub tolerance: f64,
    /// no grid beyond this many cells
    pub max_cells: usize,
}

impl Default for PlaneOptions {
    fn default() -> Self {
        // 1/30 of the box, then 61, 123, 247, 495 cells a side (a quarter million at most:
        // about a second per solve on one core)
        Self {
            first_spacing: 1.0 / 30.0,
            tolerance: 1e-3,
            max_cells: 300_000,
        }
    }
}

/// Problems of the two-coordinate analysis.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum PlaneError {
    /// the landscape
    #[error(transparent)]
    Landscape(#[from] SurfaceLandscapeError),
    /// the harmonic data
    #[error(transparent)]
    Harmonic(#[from] LangerError),
    /// the finite-volume reference
    #[error(transparent)]
    Fv(#[from] Fv2dError),
    /// the 1-D analysis along the MEP
    #[error("the one-coordinate profile along the MEP: {0}")]
    Line(#[from] TheoryError),
    /// the product disk holds the reactant minimum
    #[error(
        "the product region (a disk of radius {radius} around the product minimum ({bx:.4}, {by:.4})) holds the reactant minimum ({ax:.4}, {ay:.4}): take a radius below {distance:.4}"
    )]
    StartInProduct {
        /// the disk's radius
        radius: f64,
        /// the reactant minimum
        ax: f64,
        /// its y
        ay: f64,
        /// the product minimum
        bx: f64,
        /// its y
        by: f64,
        /// their distance
        distance: f64,
    },
}

impl PlaneError {
    /// The scenario key to look at.
    pub fn key(&self) -> &'static str {
        match self {
            Self::Landscape(SurfaceLandscapeError::BadPoint { which: "start", .. }) => {
                "states.start"
            }
            Self::Landscape(SurfaceLandscapeError::BadPoint { .. }) => "states.target",
            Self::Landscape(SurfaceLandscapeError::SameMinimum { .. }) => "states.target",
            Self::Fv(Fv2dError::EmptyRegion { .. } | Fv2dError::Overlap)
            | Self::StartInProduct { .. } => "states.product_radius",
            Self::Harmonic(LangerError::NotPositiveDefinite(_) | LangerError::Friction) => {
                "particle"
            }
            _ => "surface",
        }
    }
}

/// A reactant or product region.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "rule", rename_all = "kebab-case")]
pub enum Region {
    /// {p : (p − m)·n ≥ 0}, nearer m than any other minimum
    HalfPlane {
        /// the minimum
        minimum: Point,
        /// the outward unit normal
        normal: [f64; 2],
        /// the other minima (the region stays nearer `minimum` than these)
        #[serde(skip)]
        others: Vec<Point>,
        /// slack for points on the boundary (rounding of cell centres)
        #[serde(skip)]
        slack: f64,
    },
    /// |p − centre| ≤ radius
    Disk {
        /// the minimum
        centre: Point,
        /// the radius
        radius: f64,
    },
}

/// The unit vector from a to b.
fn unit(a: Point, b: Point) -> [f64; 2] {
    let d = dist(a, b);
    [(b[0] - a[0]) / d, (b[1] - a[1]) / d]
}

fn dist(a: Point, b: Point) -> f64 {
    (a[0] - b[0]).hypot(a[1] - b[1])
}

impl Region {
    /// Whether `p` lies in the region.
    pub fn contains(&self, p: Point) -> bool {
        match self {
            Region::HalfPlane {
                minimum,
                normal,
                others,
                slack,
            } => {
                let ahead =
                    (p[0] - minimum[0]) * normal[0] + (p[1] - minimum[1]) * normal[1] >= -slack;
                let d = dist(p, *minimum);
                ahead && others.iter().all(|o| dist(p, *o) > d)
            }
            Region::Disk { centre, radius } => dist(p, *centre) <= *radius,
        }
    }
}

/// The harmonic data at the reactant and the rate-limiting saddle.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Harmonic {
    /// H_a (kT per length²)
    pub reactant_hessian: Sym2,
    /// H_b
    pub saddle_hessian: Sym2,
    /// U_b − U_a (kT)
    pub barrier: f64,
    /// the negative eigenvalue of D·H_b (1/time) and its unit eigenvector
    pub unstable_rate: f64,
    /// the unstable direction of the overdamped flow
    pub unstable_direction: [f64; 2],
}

/// The rates (per time unit); `None` where a formula does not apply (no mass).
#[derive(Debug, Clone, Copy, Default, Serialize)]
pub struct PlaneRates {
    /// overdamped Langer with the tensor D
    pub langer_overdamped: f64,
    /// Langer with inertia (mass and friction)
    pub langer: Option<f64>,
    /// Vineyard's harmonic TST (mass)
    pub harmonic_tst: Option<f64>,
    /// 1 / exact overdamped MFPT (`None` when the solve broke down)
    pub mfpt: Option<f64>,
    /// TPT rate k_AB = ν_AB / π_A from the committor (`None` when the solve broke down)
    pub tpt: Option<f64>,
}

/// The MFPT refinement and the regions.
#[derive(Debug, Clone, Serialize)]
pub struct PlaneMfpt {
    /// from the reactant minimum
    pub start: Point,
    /// the product region
    pub product: Region,
    /// T on the finest grid (time); `None` when the solve broke down
    pub time: Option<f64>,
    /// each grid and its T (up to a breakdown)
    pub grids: Vec<RefinementStep>,
    /// relative change of T at the last refinement; `None` when the solve broke down
    pub last_change: Option<f64>,
    /// whether that change is below the tolerance
    pub converged: bool,
    /// the observed order of convergence, from the last three grids
    pub observed_order: Option<f64>,
    /// Richardson's estimate with that order
    pub extrapolated: Option<f64>,
    /// the refinement settings
    pub options: PlaneOptions,
}

/// The committor and the TPT rate.
#[derive(Debug, Clone, Serialize)]
pub struct PlaneTpt {
    /// the grid (the finest of the MFPT refinement)
    pub grid: Grid,
    /// the reactant region A
    pub reactant: Region,
    /// ν_AB (1/time)
    pub reactive_frequency: f64,
    /// π_A, the probability of having last visited A
    pub last_in_a: f64,
    /// k_AB = ν_AB/π_A
    pub rate: f64,
}

/// The one-coordinate projection along the MEP.
#[derive(Debug, Clone, Serialize)]
pub struct MepProjection {
    /// the MEP's unit tangent at the rate-limiting saddle
    pub tangent: [f64; 2],
    /// D along the path, kT/ζ_s with ζ_s = tᵀζt, ζ = kT D⁻¹
    pub diffusion: f64,
    /// the mass along the path, tᵀMt
    pub mass: Option<f64>,
    /// γ = ζ_s/m_s along the path
    pub friction: Option<f64>,
    /// the MEP's length
    pub length: f64,
    /// the 1-D barrier (kT)
    pub barrier: f64,
    /// the 1-D exact MFPT from s = 0 to the product minimum (time)
    pub mfpt: f64,
    /// the crate's 1-D rates of U(s) with these D, m, γ
    pub rates: Rates,
}

/// Everything the analytic half computes on a surface.
#[derive(Debug, Clone, Serialize)]
pub struct PlaneTheory {
    /// the landscape
    pub landscape: SurfaceLandscape,
    /// the harmonic data over the rate-limiting saddle
    pub harmonic: Harmonic,
    /// the rates
    pub rates: PlaneRates,
    /// the MFPT refinement
    pub mfpt: PlaneMfpt,
    /// the committor's TPT rate (`None` when the MFPT solve broke down)
    pub tpt: Option<PlaneTpt>,
    /// the projection along the MEP
    pub mep_1d: MepProjection,
    /// what a user should know
    pub warnings: Vec<String>,
}

/// What a user should know about the surface itself: absent nodes of a grid table.
pub fn surface_warnings(sys: &PlaneSystem) -> Vec<String> {
    match &sys.surface {
        PlaneSurface::Grid(g) if g.absent_nodes() > 0 => vec![format!(
            "{} nodes absent: the cells around them are forbidden; list forbidden nodes with U = inf to say so on purpose",
            g.absent_nodes()
        )],
        _ => Vec::new(),
    }
}

/// The default regions (module doc): (A, B).
pub fn regions(l: &SurfaceLandscape, product_radius: Option<f64>, slack: f64) -> (Region, Region) {
    let (ma, mb) = (l.minima[l.reactant].position, l.minima[l.product].position);
    if let Some(radius) = product_radius {
        return (
            Region::Disk { centre: ma, radius },
            Region::Disk { centre: mb, radius },
        );
    }
    let pts = &l.mep.points;
    let n = pts.len();
    let t_a = unit(pts[1].position, pts[0].position);
    let t_b = unit(pts[n - 2].position, pts[n - 1].position);
    let others = |k: usize| {
        l.minima
            .iter()
            .enumerate()
            .filter(|&(i, _)| i != k)
            .map(|(_, m)| m.position)
            .collect::<Vec<_>>()
    };
    (
        Region::HalfPlane {
            minimum: ma,
            normal: t_a,
            others: others(l.reactant),
            slack,
        },
        Region::HalfPlane {
            minimum: mb,
            normal: t_b,
            others: others(l.product),
            slack,
        },
    )
}

fn inverse(m: Sym2) -> Sym2 {
    let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
    [
        [m[1][1] / det, -m[0][1] / det],
        [-m[1][0] / det, m[0][0] / det],
    ]
}

/// The surface's rates with the default refinement settings.
///
/// # Errors
/// See [`analyse_plane_with`].
pub fn analyse_plane(sys: &PlaneSystem) -> Result<PlaneTheory, PlaneError> {
    analyse_plane_with(sys, &PlaneOptions::default())
}

/// The landscape, the harmonic rates, the refined MFPT, the TPT rate and the MEP projection.
///
/// # Errors
/// Landscape problems; a reactant or saddle Hessian of the wrong signature; an empty region or
/// a walled-off start; the 1-D analysis of the MEP profile failing.
pub fn analyse_plane_with(sys: &PlaneSystem, o: &PlaneOptions) -> Result<PlaneTheory, PlaneError> {
    let s = sys.surface.surface();
    let l = analyse_surface(s, sys.start, sys.target)?;
    let mut warnings = surface_warnings(sys);
    let d = sys.diffusion;
    let (ma, saddle) = (
        l.minima[l.reactant].position,
        l.saddles[l.rate_limiting_saddle].position,
    );
    let h = HarmonicBarrier::new(s.hessian(ma), s.hessian(saddle), l.barrier)?;
    let (lu, dir) = unstable_overdamped(&d, h.saddle)?;
    let harmonic = Harmonic {
        reactant_hessian: h.reactant,
        saddle_hessian: h.saddle,
        barrier: h.barrier,
        unstable_rate: lu.abs(),
        unstable_direction: dir,
    };
    if l.steps.len() > 1 {
        warnings.push(format!(
            "the path passes {} intermediate minimum(a): the harmonic rates (Langer, harmonic TST) treat the escape as one step over the rate-limiting saddle (the highest, {:.3} kT above the reactant); the MFPT and TPT rates cover the whole path",
            l.steps.len() - 1,
            l.barrier
        ));
    }
    let mass = sys.mass.map(|m| [[m[0], 0.0], [0.0, m[1]]]);
    let (langer, harmonic_tst) = match mass {
        Some(m) => {
            // Γ = M⁻¹ζ with ζ = kT D⁻¹ (= γ I when D = kT/(m_i γ))
            let z = inverse(d.0);
            let gamma = [
                [z[0][0] / m[0][0], z[0][1] / m[0][0]],
                [z[1][0] / m[1][1], z[1][1] / m[1][1]],
            ];
            (
                Some(h.ln_langer(m, gamma)?.exp()),
                Some(h.ln_vineyard(m)?.exp()),
            )
        }
        None => (None, None),
    };
    // the MFPT and the committor
    let dom = s.domain();
    let slack = 1e-7 * (dom.x.1 - dom.x.0).hypot(dom.y.1 - dom.y.0);
    let (reg_a, reg_b) = regions(&l, sys.product_radius, slack);
    let short = (dom.x.1 - dom.x.0).min(dom.y.1 - dom.y.0);
    let first = Grid::with_spacing(dom, o.first_spacing * short);
    if reg_b.contains(ma)
        && let Region::Disk { radius, centre } = reg_b
    {
        return Err(PlaneError::StartInProduct {
            radius,
            ax: ma[0],
            ay: ma[1],
            bx: centre[0],
            by: centre[1],
            distance: dist(ma, centre),
        });
    }
    let target = |p: Point| reg_b.contains(p);
    let refined = mfpt_refined(s, &d, ma, &target, first, o.tolerance, o.max_cells);
    let mut broken_steps = Vec::new();
    let (study, converged): (Option<MfptStudy>, bool) = match refined {
        Ok(st) => (Some(st), true),
        Err(Fv2dError::NotConverged { change, study, .. }) => {
            warnings.push(format!(
                "the exact MFPT changed by {change:.1e} (relative) at the last refinement, above the asked {:.0e}: the grid is capped at {} cells to keep this fast",
                o.tolerance, o.max_cells
            ));
            (Some(*study), false)
        }
        Err(e @ Fv2dError::Breakdown { .. }) => {
            warnings.push(breakdown_warning(&e, l.barrier));
            if let Fv2dError::Breakdown { steps, .. } = e {
                broken_steps = steps;
            }
            (None, false)
        }
        Err(e) => return Err(e.into()),
    };
    let (steps, tpt) = match &study {
        Some(st) => {
            let last = st.steps[st.steps.len() - 1];
            let fine = Grid::new(dom, last.nx, last.ny);
            let c = Generator::new(s, &d, fine)?.committor(&|p| reg_a.contains(p), &target);
            let c = match c {
                Ok(c) => Some(c),
                Err(e @ Fv2dError::Solver(_)) => {
                    warnings.push(breakdown_warning(&e, l.barrier));
                    None
                }
                Err(e) => return Err(e.into()),
            };
            (st.steps.clone(), c.map(|c| (fine, c)))
        }
        None => (broken_steps, None),
    };
    let mep_1d = project(sys, &l)?;
    let rates = PlaneRates {
        langer_overdamped: h.ln_langer_overdamped(&d)?.exp(),
        langer,
        harmonic_tst,
        mfpt: study.as_ref().map(|st| 1.0 / st.time),
        tpt: tpt.as_ref().map(|(_, c)| c.rate),
    };
    Ok(PlaneTheory {
        harmonic,
        rates,
        mfpt: PlaneMfpt {
            start: ma,
            product: reg_b,
            time: study.as_ref().map(|st| st.time),
            grids: steps,
            last_change: study.as_ref().map(|st| st.last_change),
            converged,
            observed_order: study.as_ref().and_then(|st| st.observed_order),
            extrapolated: study.as_ref().and_then(|st| st.extrapolated),
            options: *o,
        },
        tpt: tpt.map(|(grid, c)| PlaneTpt {
            grid,
            reactant: reg_a,
            reactive_frequency: c.reactive_frequency,
            last_in_a: c.last_in_a,
            rate: c.rate,
        }),
        mep_1d,
        landscape: l,
        warnings,
    })
}

/// The warning for an MFPT or committor solve that lost its accuracy.
fn breakdown_warning(e: &Fv2dError, barrier: f64) -> String {
    format!(
        "{e}: the barrier of {barrier:.1} kT is too high for the finite-volume solve (its condition number grows like e^(barrier)/h^2), so the exact MFPT and TPT rates are left out; the harmonic rates and the MEP's 1-D rates stand"
    )
}

/// U along the ray `from` + r·`dir`, r = `step`, 2 `step`, … and the point on the box wall,
/// while the point is allowed, U is finite and U does not fall (a ridge ends the well): the
/// (r, U) pairs. Empty when the first step already fails.
fn ray(s: &dyn Surface, from: Point, dir: [f64; 2], step: f64) -> Vec<(f64, f64)> {
    let dom = s.domain();
    let reach = |p: f64, d: f64, (lo, hi): (f64, f64)| match d {
        d if d > 0.0 => (hi - p) / d,
        d if d < 0.0 => (lo - p) / d,
        _ => f64::INFINITY,
    };
    let wall = reach(from[0], dir[0], dom.x).min(reach(from[1], dir[1], dom.y));
    let mut out: Vec<(f64, f64)> = Vec::new();
    let mut prev = s.u(from);
    let mut r = step;
    loop {
        // the last point exactly on the wall, none closer to it than a tenth of a step
        let at = if r > wall - 0.1 * step { wall } else { r };
        let p = [from[0] + at * dir[0], from[1] + at * dir[1]];
        let u = s.u(p);
        if at <= 0.0 || !s.allowed(p) || !u.is_finite() || u < prev {
            return out;
        }
        out.push((at, u));
        if at == wall {
            return out;
        }
        prev = u;
        r += step;
    }
}

/// The 1-D profile U(s) along the MEP and its rates (module doc).
fn project(sys: &PlaneSystem, l: &SurfaceLandscape) -> Result<MepProjection, PlaneError> {
    let surface = sys.surface.surface();
    let pts = &l.mep.points;
    let n = pts.len();
    let length = pts[n - 1].s;
    let step = length / (n - 1) as f64;
    let first = l.steps.first().map_or(0.5 * length, |st| st.s);
    let last = l.steps.last().map_or(0.5 * length, |st| st.s);
    let (pa, pb) = (pts[0].position, pts[n - 1].position);
    let before = ray(surface, pa, unit(pts[1].position, pa), step);
    let after = ray(surface, pb, unit(pts[n - 2].position, pb), step);
    let mut rows: Vec<(f64, f64)> = pts.iter().map(|p| (p.s, p.u)).collect();
    // the real surface beyond each end where there is room, else the mirror image
    if before.is_empty() {
        rows.extend(
            pts.iter()
                .filter(|p| p.s > 0.0 && p.s <= first)
                .map(|p| (-p.s, p.u)),
        );
    } else {
        rows.extend(before.iter().map(|&(r, u)| (-r, u)));
    }
    if after.is_empty() {
        rows.extend(
            pts.iter()
                .filter(|p| p.s < length && p.s >= last)
                .map(|p| (2.0 * length - p.s, p.u)),
        );
    } else {
        rows.extend(after.iter().map(|&(r, u)| (length + r, u)));
    }
    rows.sort_by(|a, b| a.0.total_cmp(&b.0));
    rows.dedup_by(|a, b| a.0 == b.0);
    let cols = Columns {
        x: rows.iter().map(|r| r.0).collect(),
        u: rows.iter().map(|r| r.1).collect(),
        ..Columns::default()
    };
    let saddle = l.saddles[l.rate_limiting_saddle].position;
    let t = l.mep.tangent_near(saddle);
    // one embedding: the friction matrix ζ = kT D⁻¹ and the mass M projected on t, D = kT/ζ_s
    let zeta = DiffusionTensor(inverse(sys.diffusion.0)).apply(t);
    let zeta_s = t[0] * zeta[0] + t[1] * zeta[1];
    let d_s = 1.0 / zeta_s;
    let m_s = sys.mass.map(|m| m[0] * t[0] * t[0] + m[1] * t[1] * t[1]);
    let gamma = m_s.map(|m| zeta_s / m);
    let line = System {
        potential: AnyPotential::Table(Table::new(&cols, 1.0)),
        diffusion: Diffusion::Constant(d_s),
        mass: m_s,
        friction: gamma,
        memory_time: None,
        period: None,
        start: Some(0.0),
        target: Some(length),
        temperature_k: sys.temperature_k,
    };
    let r = super::analyse(&line)?;
    Ok(MepProjection {
        tangent: t,
        diffusion: d_s,
        mass: m_s,
        friction: gamma,
        length,
        barrier: r.landscape.barrier_height,
        mfpt: r.mfpt.time,
        rates: r.rates,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::potential::surface::{DiffusionTensor, MullerBrown};

    /// On Müller–Brown the default regions hold their own minimum and none of the others (the
    /// half-plane alone would reach across the box; the nearest-minimum limit keeps it in its
    /// basin), and a disk holds exactly the points within its radius (exact geometry).
    #[test]
    fn regions_stay_in_their_basins() {
        let s = MullerBrown::new(0.15);
        let l = analyse_surface(&s, None, None).unwrap();
        let (a, b) = regions(&l, None, 1e-9);
        let pos = |k: usize| l.minima[k].position;
        assert!(a.contains(pos(l.reactant)) && !a.contains(pos(l.product)));
        assert!(b.contains(pos(l.product)) && !b.contains(pos(l.reactant)));
        for k in l.intermediate_minima() {
            assert!(!a.contains(pos(k)) && !b.contains(pos(k)));
        }
        let (_, d) = regions(&l, Some(0.1), 0.0);
        let m = pos(l.product);
        assert!(d.contains([m[0] + 0.099, m[1]]) && !d.contains([m[0], m[1] + 0.101]));
    }

    /// Refinement stopped by the cell cap keeps every grid it solved and reports the finest:
    /// on Müller–Brown (scale 0.05, D = diag(1, 0.1), first spacing 0.07 of the box, capped at
    /// the third grid) the relative changes go 0.017, 0.023 (not monotone), so accepting the
    /// result at the last change would stop one grid early. Exact bookkeeping, no tolerance.
    #[test]
    fn capped_refinement_keeps_the_finest_grid() {
        let sys = PlaneSystem {
            surface: crate::system::PlaneSurface::MullerBrown(MullerBrown::new(0.05)),
            diffusion: DiffusionTensor::diagonal(1.0, 0.1),
            mass: None,
            friction: None,
            start: None,
            target: None,
            product_radius: None,
            temperature_k: None,
        };
        let dom = sys.surface.surface().domain();
        let short = (dom.x.1 - dom.x.0).min(dom.y.1 - dom.y.0);
        let third = Grid::with_spacing(dom, 0.07 * short).refined().refined();
        let o = PlaneOptions {
            first_spacing: 0.07,
            tolerance: 1e-3,
            max_cells: third.cells(),
        };
        let t = analyse_plane_with(&sys, &o).unwrap();
        let g = &t.mfpt.grids;
        let nx: Vec<usize> = g.iter().map(|s| s.nx).collect();
        assert_eq!(nx, [15, 31, 63]);
        let (prev, last) = (g[g.len() - 2], g[g.len() - 1]);
        assert!(!t.mfpt.converged);
        assert_eq!(t.mfpt.time, Some(last.time));
        assert_eq!(
            t.mfpt.last_change,
            Some((last.time - prev.time).abs() / last.time)
        );
        assert_eq!(t.tpt.unwrap().grid.nx, 63);
        assert!(t.warnings.iter().any(|w| w.contains("capped")));
    }
}
