//! Periodic and tilted landscapes (PHYSICS.md §7), internal units (kT = 1): on the tilted-periodic
//! extension of a potential known on one period ([`crate::potential::periodic`]), the exact
//! overdamped drift velocity, effective diffusion, and hopping rates between neighbouring minima.
//!
//! Conventions: U(x) = V(x) − F x with V periodic in L; F > 0 pushes to the right. D(x) is read on
//! the base period [x0, x0 + L] and repeated (it must be periodic for any of this to hold).
//!
//! - `Periodic`: x = x0 + nL + r, 0 ≤ r < L → U(x) = U_in(x0 + r) − F n L, with the tilt
//!   F = −(U_in(x0 + L) − U_in(x0))/L read off the profile.
//! - Drift (R. L. Stratonovich 1958; Risken, The Fokker–Planck Equation, 2nd ed. (Springer 1989),
//!   ch. 11, the overdamped case; equation number not checked): with stationary flux J and
//!   periodic density p,
//!   v = J L = L (1 − e^{−FL}) / ∫_0^L dx ∫_0^L dy e^{U(x+y) − U(x)} / D(x+y).
//!   Derivation with D(x) (Itô drift D U' − D', stationary law e^{−U}): J = −D e^{−U} (e^{U} p)';
//!   integrating (e^{U} p)' = −J e^{U}/D over one period and using p(x+L) = p(x),
//!   U(x+L) = U(x) − FL gives p(x) = J e^{−U(x)} ∫_x^{x+L} e^{U}/D / (1 − e^{−FL}); ∫_0^L p = 1
//!   fixes J. With D constant this is PHYSICS.md §7; V = 0 gives v = D F.
//! - Linear response: v ≈ D_LJ F for small F, D_LJ the Lifson–Jackson coefficient of V.
//! - Lifson–Jackson (J. Chem. Phys. 36, 2410 (1962)): D_LJ = L² / [∫_0^L e^{V}/D ∫_0^L e^{−V}];
//!   for V = V0 cos(2πx/L) and constant D, D_LJ = D/I0(V0)².
//! - Tilted effective diffusion, constant D (Reimann, Van den Broeck, Linke, Hänggi, Rubí &
//!   Pérez-Madrid, Phys. Rev. Lett. 87, 010602 (2001)):
//!   D_eff = D L² ∫_0^L I_+(x)² I_−(x) dx / [∫_0^L I_+(x) dx]³,
//!   I_+(x) = ∫_0^L dy e^{U(x) − U(x−y)}, I_−(x) = ∫_0^L dy e^{U(x+y) − U(x)}
//!   (the ± labels may be swapped throughout). Not implemented for D(x) with F ≠ 0: the naive
//!   replacement of e^{U}/D does not reduce to Lifson–Jackson, so `effective_diffusion` is `None`.
//! - Hopping out of the minimum x_a to its neighbours x_± (both absorbing; PHYSICS.md §6):
//!   π_+ = Φ(x_a)/Φ(x_+), Φ(z) = ∫_{x_−}^z e^{U}/D, and the MFPT from the Green's function,
//!   T = (1 − π_+) ∫_{x_−}^{x_a} Φ e^{−U} + π_+ ∫_{x_a}^{x_+} Φ̄ e^{−U}, Φ̄(z) = ∫_z^{x_+} e^{U}/D,
//!   a sum of positive terms (no cancellation); k_+ = π_+/T, k_− = (1 − π_+)/T. With one well per
//!   period x_− = x_a − L, and the substitution y → y − L maps ∫_{x_−}^{x_a} e^{U}/D onto
//!   e^{FL} ∫_{x_a}^{x_+} e^{U}/D, so k_+/k_− = π_+/(1 − π_+) = e^{FL} exactly (local detailed
//!   balance: U(x_+) − U(x_a) = −FL).
//! - Per-barrier rates: Kramers k_± = (λ₊(γ, ω_b±)/ω_b±)(ω_a/2π) e^{−ΔU±} (Kramers, Physica 7, 284
//!   (1940)) and Smoluchowski k_± = D(x_b±) sqrt(U''(x_a)|U''(x_b±)|)/(2π) e^{−ΔU±}.
//!
//! Every integral is a log-space Gauss–Legendre sum ([`crate::quad`]) whose cumulative parts are
//! accumulated as logarithms, and the periodic wrap-around ∫_x^{x+L} is split as
//! ∫_x^{x0+L} + e^{−FL} ∫_{x0}^{x} (two positive terms), so barriers of hundreds of kT and large
//! tilts of either sign neither overflow nor cancel.

use crate::landscape::{Kind, LandscapeError, Stationary, stationary_points};
use crate::potential::periodic::{ByRef, CHECK_SAMPLES, Periodic, WrapError};
use crate::potential::{Diffusion, Potential};
use crate::quad::{LogSum, NODES, breakpoints, log_add, panels, rule};
use crate::theory::kramers;
use serde::Serialize;
use std::f64::consts::PI;
use thiserror::Error;

/// Convergence target on every ln-integral between panel doublings (≈ relative error), as for the
/// MFPT ([`crate::theory::mfpt::MFPT_TOL`]).
pub const PERIODIC_TOL: f64 = 1e-11;
/// Largest panel count per segment before giving up doubling (the result is still returned, with
/// its last change).
const MAX_PER: usize = 1 << 13;
/// Two minima closer than this (in periods) to x_a ± L are x_a ± L: the stationary-point search
/// refines roots to ~1e-13 of the window.
const SNAP_PERIODS: f64 = 1e-7;

/// Problems with a periodic analysis; [`PeriodicError::key`] names the scenario key to look at.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum PeriodicError {
    /// The periodic extension itself is ill-posed.
    #[error(transparent)]
    Wrap(#[from] WrapError),
    /// D(x) is not positive and finite on the base period.
    #[error("D(x) = {value} at x = {x}: the diffusion coefficient must be positive and finite")]
    BadDiffusion {
        /// where
        x: f64,
        /// the value
        value: f64,
        /// whether D is a constant (particle.diffusion) rather than a function of x
        constant: bool,
    },
    /// The stationary-point search failed.
    #[error(transparent)]
    Landscape(#[from] LandscapeError),
}

impl PeriodicError {
    /// The scenario key a user should look at.
    pub fn key(&self) -> &'static str {
        match self {
            Self::Wrap(e) => e.key(),
            Self::BadDiffusion { constant: true, .. } => "particle.diffusion",
            Self::BadDiffusion { .. } => "particle.diffusion_expr",
            Self::Landscape(e) => e.key(),
        }
    }
}

/// Hopping between neighbouring minima (internal units: rates per time, energies in kT).
#[derive(Debug, Clone, Serialize)]
pub struct Hopping {
    /// reactant minimum x_a
    pub reactant: f64,
    /// the adjacent minimum on the right, x_+
    pub forward_minimum: f64,
    /// the adjacent minimum on the left, x_−
    pub backward_minimum: f64,
    /// the highest barrier top between x_a and x_+
    pub forward_barrier_top: f64,
    /// the highest barrier top between x_− and x_a
    pub backward_barrier_top: f64,
    /// ΔU_+ = U(x_b+) − U(x_a)
    pub barrier_forward: f64,
    /// ΔU_− = U(x_b−) − U(x_a)
    pub barrier_backward: f64,
    /// x_± = x_a ± L (one minimum per period)
    pub one_well_per_period: bool,
    /// the minima of one period [x_a, x_a + L), x_a first (the sites of the long simulations)
    pub period_minima: Vec<f64>,
    /// splitting probability π_+ (reach x_+ before x_−)
    pub splitting_forward: f64,
    /// exact overdamped MFPT from x_a to either neighbour
    pub mfpt: f64,
    /// exact overdamped k_+ = π_+/T
    pub forward: f64,
    /// exact overdamped k_− = (1 − π_+)/T
    pub backward: f64,
    /// Smoluchowski k_+ over the forward barrier
    pub forward_smoluchowski: f64,
    /// Smoluchowski k_− over the backward barrier
    pub backward_smoluchowski: f64,
    /// Kramers k_+ (needs a mass and friction)
    pub forward_kramers: Option<f64>,
    /// Kramers k_− (needs a mass and friction)
    pub backward_kramers: Option<f64>,
    /// |Δ ln| of the hopping integrals at the last panel doubling (≈ relative error)
    pub last_change: f64,
}

/// Everything the periodic analysis computes (internal units).
#[derive(Debug, Clone, Serialize)]
pub struct PeriodicTheory {
    /// period L
    pub period: f64,
    /// start x0 of the base period
    pub origin: f64,
    /// tilt F (kT/length)
    pub tilt: f64,
    /// exact overdamped drift velocity (length/time)
    pub drift: f64,
    /// linear response D_LJ F
    pub drift_linear: f64,
    /// Lifson–Jackson coefficient of the untilted V (length²/time)
    pub effective_diffusion_untilted: f64,
    /// effective diffusion of the tilted landscape (Reimann et al. 2001; Lifson–Jackson at F = 0);
    /// `None` for D(x) with F ≠ 0
    pub effective_diffusion: Option<f64>,
    /// hopping rates; `None` when U has no minimum (tilt beyond the critical tilt)
    pub hopping: Option<Hopping>,
    /// |Δ ln| of the period integrals at the last panel doubling (≈ relative error)
    pub last_change: f64,
    /// what a user should know
    pub warnings: Vec<String>,
}

/// Gauss–Legendre nodes on panels, with log weights.
struct Grid {
    x: Vec<f64>,
    ln_w: Vec<f64>,
    half: Vec<f64>,
}

/// ln of cumulative integrals at every node: from the start (`left`) and to the end (`right`).
struct Cumulative {
    left: Vec<f64>,
    right: Vec<f64>,
    total: f64,
}

impl Grid {
    fn new(breaks: &[f64], per: usize) -> Self {
        let r = rule();
        let ps = panels(breaks, per);
        let mut x = Vec::with_capacity(ps.len() * NODES);
        let mut ln_w = Vec::with_capacity(ps.len() * NODES);
        let mut half = Vec::with_capacity(ps.len());
        for (p, q) in ps {
            let h = 0.5 * (q - p);
            let mid = 0.5 * (p + q);
            half.push(h);
            for j in 0..NODES {
                x.push(mid + h * r.t[j]);
                ln_w.push((r.w[j] * h).ln());
            }
        }
        Self { x, ln_w, half }
    }

    /// ln ∫ e^{h} over the whole grid.
    fn ln_integral(&self, h: impl Iterator<Item = f64>) -> f64 {
        let mut s = LogSum::default();
        for (lw, v) in self.ln_w.iter().zip(h) {
            s.add(lw + v);
        }
        s.ln()
    }

    /// Cumulative integrals of e^{h} (h given at the nodes), each panel shifted by its largest
    /// exponent; the right-hand partials use the mirrored cumulative matrix
    /// ∫_{t_j}^{1} ℓ_k = S[n−1−j][n−1−k] (the nodes are symmetric).
    fn cumulative(&self, h: &[f64]) -> Cumulative {
        let r = rule();
        let np = self.half.len();
        let mut g = [0.0; NODES];
        let mut totals = Vec::with_capacity(np);
        let mut inner_left = vec![f64::NEG_INFINITY; h.len()];
        let mut inner_right = vec![f64::NEG_INFINITY; h.len()];
        for p in 0..np {
            let hp = &h[p * NODES..(p + 1) * NODES];
            let m = hp.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let ln_scale = self.half[p].ln() + m;
            for (gk, v) in g.iter_mut().zip(hp) {
                *gk = (v - m).exp();
            }
            let tot: f64 = r.w.iter().zip(&g).map(|(w, gk)| w * gk).sum();
            totals.push(ln_scale + tot.ln());
            for j in 0..NODES {
                let cl: f64 = (0..NODES).map(|k| r.s[j][k] * g[k]).sum();
                let cr: f64 = (0..NODES)
                    .map(|k| r.s[NODES - 1 - j][NODES - 1 - k] * g[k])
                    .sum();
                // a non-positive partial is interpolation noise of an unresolved panel; the
                // doubling refines it away
                if cl > 0.0 {
                    inner_left[p * NODES + j] = ln_scale + cl.ln();
                }
                if cr > 0.0 {
                    inner_right[p * NODES + j] = ln_scale + cr.ln();
                }
            }
        }
        let mut left = vec![0.0; h.len()];
        let mut right = vec![0.0; h.len()];
        let mut acc = f64::NEG_INFINITY;
        for p in 0..np {
            for j in 0..NODES {
                left[p * NODES + j] = log_add(acc, inner_left[p * NODES + j]);
            }
            acc = log_add(acc, totals[p]);
        }
        let total = acc;
        let mut acc = f64::NEG_INFINITY;
        for p in (0..np).rev() {
            for j in 0..NODES {
                right[p * NODES + j] = log_add(acc, inner_right[p * NODES + j]);
            }
            acc = log_add(acc, totals[p]);
        }
        Cumulative { left, right, total }
    }
}

/// Runs `level(per)` for per = 16, 32, … until every returned ln-value changes by less than
/// [`PERIODIC_TOL`] (or per reaches [`MAX_PER`]); returns the last values and the largest change.
fn converge_all<const K: usize>(mut level: impl FnMut(usize) -> [f64; K]) -> ([f64; K], f64) {
    let mut per = 16;
    let mut prev = level(per);
    loop {
        per *= 2;
        let next = level(per);
        let change = prev
            .iter()
            .zip(&next)
            .map(|(a, b)| {
                if a == b {
                    0.0
                } else if a.is_finite() && b.is_finite() {
                    (a - b).abs()
                } else {
                    f64::INFINITY
                }
            })
            .fold(0.0, f64::max);
        prev = next;
        if change < PERIODIC_TOL || per >= MAX_PER {
            return (prev, change);
        }
    }
}

/// ln |1 − e^{−a}| without overflow or cancellation (a ≠ 0).
fn ln_abs_one_minus_exp_neg(a: f64) -> f64 {
    if a > 0.0 {
        (-(-a).exp_m1()).ln()
    } else {
        -a + (-(a.exp_m1())).ln()
    }
}

/// The period integrals (logarithms) behind the drift and the effective diffusion.
#[derive(Debug, Clone, Copy)]
struct PeriodIntegrals {
    /// ln ∫_0^L dx ∫_0^L dy e^{U(x+y) − U(x)}/D(x+y)
    ln_n: f64,
    /// ln ∫ e^{V}/D, ln ∫ e^{−V}
    ln_lj: (f64, f64),
    /// ln ∫ I_+, ln ∫ I_+² I_−, ln ∫ I_−, ln ∫ I_−² I_+ (I without D; meaningful for constant D)
    ln_reimann: [f64; 4],
    change: f64,
}

fn period_integrals(
    per: &Periodic<ByRef<'_>>,
    diff: &Diffusion,
    breaks: &[f64],
) -> PeriodIntegrals {
    let (x0, l, f) = (per.origin(), per.period(), per.tilt());
    let fl = f * l;
    let ([ln_n, lj_a, lj_b, r0, r1, r2, r3], change) = converge_all(|n| {
        let g = Grid::new(breaks, n);
        let u: Vec<f64> = g.x.iter().map(|&x| per.inner().u(x)).collect();
        let ln_d: Vec<f64> = g.x.iter().map(|&x| diff.value(x).ln()).collect();
        // ψ = e^{U}/D and e^{−U}, cumulative over the base period
        let hpsi: Vec<f64> = u.iter().zip(&ln_d).map(|(a, b)| a - b).collect();
        let hneg: Vec<f64> = u.iter().map(|a| -a).collect();
        let p = g.cumulative(&hpsi);
        let q = g.cumulative(&hneg);
        // ln I_−^D(x) = −U(x) + ln[∫_x^{x0+L} ψ + e^{−FL} ∫_{x0}^{x} ψ]
        let ln_im_d: Vec<f64> = (0..u.len())
            .map(|j| -u[j] + log_add(p.right[j], -fl + p.left[j]))
            .collect();
        // ln I_+(x) = U(x) + ln[∫_{x0}^{x} e^{−U} + e^{−FL} ∫_x^{x0+L} e^{−U}]
        let ln_ip: Vec<f64> = (0..u.len())
            .map(|j| u[j] + log_add(q.left[j], -fl + q.right[j]))
            .collect();
        let ln_n = g.ln_integral(ln_im_d.iter().copied());
        // V = U + F (x − x0)
        let v: Vec<f64> = g.x.iter().zip(&u).map(|(x, a)| a + f * (x - x0)).collect();
        let lj_a = g.ln_integral(v.iter().zip(&ln_d).map(|(a, b)| a - b));
        let lj_b = g.ln_integral(v.iter().map(|a| -a));
        // I_− without D (constant D only): add ln D back
        let ln_im: Vec<f64> = ln_im_d.iter().zip(&ln_d).map(|(a, b)| a + b).collect();
        let r0 = g.ln_integral(ln_ip.iter().copied());
        let r1 = g.ln_integral(ln_ip.iter().zip(&ln_im).map(|(a, b)| 2.0 * a + b));
        let r2 = g.ln_integral(ln_im.iter().copied());
        let r3 = g.ln_integral(ln_ip.iter().zip(&ln_im).map(|(a, b)| a + 2.0 * b));
        [ln_n, lj_a, lj_b, r0, r1, r2, r3]
    });
    PeriodIntegrals {
        ln_n,
        ln_lj: (lj_a, lj_b),
        ln_reimann: [r0, r1, r2, r3],
        change,
    }
}

/// The exact overdamped hop integrals: (ln π_+, ln(1 − π_+), ln T, change).
fn hop_integrals(
    per: &Periodic<ByRef<'_>>,
    diff: &Diffusion,
    xm: f64,
    xa: f64,
    xp: f64,
    points: &[Stationary],
) -> ([f64; 3], f64) {
    let inside = |lo: f64, hi: f64| breakpoints(lo, hi, points.iter().map(|s| s.x));
    let (bl, br) = (inside(xm, xa), inside(xa, xp));
    converge_all(|n| {
        let (gl, gr) = (Grid::new(&bl, n), Grid::new(&br, n));
        let side = |g: &Grid| {
            let u: Vec<f64> = g.x.iter().map(|&x| per.u(x)).collect();
            let h: Vec<f64> =
                g.x.iter()
                    .zip(&u)
                    .map(|(&x, a)| a - per.diffusion_at(diff, x).ln())
                    .collect();
            (u, g.cumulative(&h))
        };
        let (ul, cl) = side(&gl);
        let (ur, cr) = side(&gr);
        // Φ(x_a) and Φ̄(x_a)
        let (phi_a, phibar_a) = (cl.total, cr.total);
        let ln_tot = log_add(phi_a, phibar_a);
        let (ln_pp, ln_pm) = (phi_a - ln_tot, phibar_a - ln_tot);
        let a1 = gl.ln_integral(cl.left.iter().zip(&ul).map(|(a, b)| a - b));
        let a2 = gr.ln_integral(cr.right.iter().zip(&ur).map(|(a, b)| a - b));
        let ln_t = log_add(ln_pm + a1, ln_pp + a2);
        [ln_pp, ln_pm, ln_t]
    })
}

/// Analyses a tilted-periodic landscape: `pot` is read on the base period `[x0, x0 + period]`
/// (any potential whose force repeats there: a washboard, a formula, a table), D on the same
/// period. `x_a_guess`: the reactant is the minimum nearest to it. `mass` and `friction` enable
/// the Kramers per-barrier rates.
///
/// # Errors
/// See [`PeriodicError`]: bad period, non-periodic profile, non-finite values, bad D(x).
pub fn analyse(
    pot: &dyn Potential,
    diffusion: &Diffusion,
    x0: f64,
    period: f64,
    x_a_guess: f64,
    mass: Option<f64>,
    friction: Option<f64>,
) -> Result<PeriodicTheory, PeriodicError> {
    let per = Periodic::new(ByRef(pot), x0, period)?;
    let (l, f) = (period, per.tilt());
    for i in 0..=CHECK_SAMPLES {
        let x = x0 + l * i as f64 / CHECK_SAMPLES as f64;
        let value = diffusion.value(x);
        if !(value.is_finite() && value > 0.0) {
            return Err(PeriodicError::BadDiffusion {
                x,
                value,
                constant: diffusion.constant().is_some(),
            });
        }
    }
    let mut warnings = Vec::new();
    // stationary points of the base period: panel breakpoints
    let base = per.clone().with_window(x0, x0 + l)?;
    let base_points = stationary_points(&base)?;
    let breaks = breakpoints(x0, x0 + l, base_points.iter().map(|s| s.x));
    let pi = period_integrals(&per, diffusion, &breaks);
    let fl = f * l;
    let drift = if fl == 0.0 {
        0.0
    } else {
        fl.signum() * (l.ln() + ln_abs_one_minus_exp_neg(fl) - pi.ln_n).exp()
    };
    let d_lj = (2.0 * l.ln() - pi.ln_lj.0 - pi.ln_lj.1).exp();
    let effective_diffusion = match diffusion.constant() {
        Some(d) => {
            let [r0, r1, ..] = pi.ln_reimann;
            Some((d.ln() + 2.0 * l.ln() + r1 - 3.0 * r0).exp())
        }
        None if fl == 0.0 => Some(d_lj),
        None => None,
    };
    let g = if x_a_guess.is_finite() { x_a_guess } else { x0 };
    let hopping = hopping(&per, diffusion, g, mass, friction)?;
    if hopping.is_none() {
        warnings.push(format!(
            "U has no minimum: the tilt F = {f} exceeds the critical tilt (running state), so there are no hopping rates"
        ));
    }
    if pi.change >= PERIODIC_TOL {
        warnings.push(format!(
            "the period integrals did not converge (last relative change {:.1e})",
            pi.change
        ));
    }
    Ok(PeriodicTheory {
        period: l,
        origin: x0,
        tilt: f,
        drift,
        drift_linear: d_lj * f,
        effective_diffusion_untilted: d_lj,
        effective_diffusion,
        hopping,
        last_change: pi.change,
        warnings,
    })
}

fn hopping(
    per: &Periodic<ByRef<'_>>,
    diff: &Diffusion,
    g: f64,
    mass: Option<f64>,
    friction: Option<f64>,
) -> Result<Option<Hopping>, PeriodicError> {
    let l = per.period();
    let win = per.clone().with_window(g - 2.5 * l, g + 2.5 * l)?;
    let points = stationary_points(&win)?;
    let minima: Vec<&Stationary> = points.iter().filter(|p| p.kind == Kind::Minimum).collect();
    let Some(a) = minima
        .iter()
        .min_by(|p, q| (p.x - g).abs().total_cmp(&(q.x - g).abs()))
    else {
        return Ok(None);
    };
    let xa = a.x;
    let snap = SNAP_PERIODS * l;
    let next = minima.iter().find(|p| p.x > xa + snap).map(|p| p.x);
    let prev = minima.iter().rev().find(|p| p.x < xa - snap).map(|p| p.x);
    let (Some(mut xp), Some(mut xm)) = (next, prev) else {
        return Ok(None);
    };
    let (mut one_p, mut one_m) = (false, false);
    if (xp - (xa + l)).abs() < snap {
        xp = xa + l;
        one_p = true;
    }
    if (xm - (xa - l)).abs() < snap {
        xm = xa - l;
        one_m = true;
    }
    let top = |lo: f64, hi: f64| {
        points
            .iter()
            .filter(|p| p.kind == Kind::Maximum && p.x > lo && p.x < hi)
            .max_by(|p, q| p.u.total_cmp(&q.u))
            .copied()
    };
    let (Some(bp), Some(bm)) = (top(xa, xp), top(xm, xa)) else {
        return Ok(None);
    };
    let ([ln_pp, ln_pm, ln_t], change) = hop_integrals(per, diff, xm, xa, xp, &points);
    let ua = per.u(xa);
    let (dp, dm) = (bp.u - ua, bm.u - ua);
    let ca = per.d2u(xa);
    let smol = |b: &Stationary, e: f64| {
        kramers::ln_smoluchowski(per.diffusion_at(diff, b.x), ca, b.curvature.abs(), e).exp()
    };
    let kramers_rate = |b: &Stationary, e: f64| -> Option<f64> {
        let (m, gamma) = (mass?, friction?);
        let wa = (ca / m).sqrt();
        let wb = (b.curvature.abs() / m).sqrt();
        Some(kramers::lambda_plus(gamma, wb) / wb * wa / (2.0 * PI) * (-e).exp())
    };
    // one period's minima from x_a on; copies of x_a within the snap are x_a itself
    let period_minima: Vec<f64> = std::iter::once(xa)
        .chain(
            minima
                .iter()
                .map(|p| p.x)
                .filter(|&x| x > xa + snap && x < xa + l - snap),
        )
        .collect();
    Ok(Some(Hopping {
        reactant: xa,
        period_minima,
        forward_minimum: xp,
        backward_minimum: xm,
        forward_barrier_top: bp.x,
        backward_barrier_top: bm.x,
        barrier_forward: dp,
        barrier_backward: dm,
        one_well_per_period: one_p && one_m,
        splitting_forward: ln_pp.exp(),
        mfpt: ln_t.exp(),
        forward: (ln_pp - ln_t).exp(),
        backward: (ln_pm - ln_t).exp(),
        forward_smoluchowski: smol(&bp, dp),
        backward_smoluchowski: smol(&bm, dm),
        forward_kramers: kramers_rate(&bp, dp),
        backward_kramers: kramers_rate(&bm, dm),
        last_change: change,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::potential::Family;

    fn washboard(amp: f64, tilt: f64, period: f64) -> Family {
        Family::Washboard {
            amp,
            period,
            tilt,
            domain: (-3.0 * period, 3.0 * period),
        }
    }

    // Reimann et al. (2001): the formula holds with I_+ and I_− swapped; the two arrangements
    // are different sums here, so agreement to ~1e-10 checks the wrap-around bookkeeping.
    #[test]
    fn reimann_sign_choices_agree() {
        let w = washboard(2.0, 1.5, 1.0);
        let per = Periodic::new(ByRef(&w), 0.0, 1.0).unwrap();
        let base = per.clone().with_window(0.0, 1.0).unwrap();
        let pts = stationary_points(&base).unwrap();
        let br = breakpoints(0.0, 1.0, pts.iter().map(|s| s.x));
        let pi = period_integrals(&per, &Diffusion::Constant(1.0), &br);
        let [r0, r1, r2, r3] = pi.ln_reimann;
        let a = r1 - 3.0 * r0;
        let b = r3 - 3.0 * r2;
        assert!((a - b).abs() < 1e-10, "{a} {b}");
        // ∫ I_+ = ∫ I_− (a change of variables)
        assert!((r0 - r2).abs() < 1e-11);
    }

    #[test]
    fn errors_name_their_keys() {
        let w = washboard(2.0, 1.5, 1.0);
        let e = Periodic::new(ByRef(&w), 0.0, -1.0).unwrap_err();
        assert_eq!(e.key(), "potential.period");
        // a period of 0.7 does not repeat the force of a period-1 washboard
        let e = Periodic::new(ByRef(&w), 0.0, 0.7).unwrap_err();
        assert!(matches!(e, WrapError::NotPeriodic { .. }), "{e}");
        assert_eq!(e.key(), "potential");
        let e = Periodic::new(ByRef(&w), 2.5, 1.0).unwrap_err();
        assert_eq!(e.key(), "potential.domain");
    }
}
