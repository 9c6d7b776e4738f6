//! Landscape analysis of a potential of one coordinate (this file; [`surface`] for two):
//! stationary points, the reactant minimum, barrier, product minimum and target, curvatures,
//! frequencies and the action of the reactant-side orbit at the barrier energy.
//!
//! Stationary points come from a fine scan of U' for sign changes refined by Brent's method (or,
//! for a spline, the exact roots of its piecewise-quadratic U'). Conventions (PHYSICS.md):
//! ω_a = sqrt(U''(x_a)/m), ω_b = sqrt(|U''(x_b)|/m), I_b = 2 ∫ sqrt(2m(U(x_b) − U(x))) dx between
//! the turning points of the reactant-side orbit (Kramers, Physica 7, 284 (1940); Hänggi, Talkner &
//! Borkovec, Rev. Mod. Phys. 62, 251 (1990), Sec. IV). All energies in kT.

pub mod surface;

use crate::potential::Potential;
use roots::{SimpleConvergency, find_root_brent};
use serde::Serialize;
use thiserror::Error;

/// Default target for a metastable well: where U has dropped this far (kT) below the barrier top.
pub const METASTABLE_DROP_KT: f64 = 10.0;
/// Below this barrier (kT) the asymptotic formulas are unreliable.
pub const LOW_BARRIER_KT: f64 = 5.0;
/// A target whose energy is less than this far (kT) below the barrier top lets particles return
/// over the barrier often enough (overdamped splitting probability of order e^(-3) = 5%) that
/// 1/MFPT is no longer the rate.
pub const TARGET_DROP_WARN_KT: f64 = 3.0;

/// Landscape problems; [`LandscapeError::key`] names the scenario key to look at.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum LandscapeError {
    /// U or U' is NaN or infinite somewhere in the domain.
    #[error("{what} is not finite at x = {x} (a pole or an invalid operation inside the domain)")]
    NotFinite {
        /// "U(x)" or "U'(x)"
        what: &'static str,
        /// where
        x: f64,
    },
    /// No interior minimum.
    #[error("the potential has no minimum inside the domain [{lo}, {hi}]")]
    NoMinimum {
        /// domain start
        lo: f64,
        /// domain end
        hi: f64,
    },
    /// No maximum between reactant and target (or on either side of the reactant).
    #[error("no barrier between the reactant minimum at x = {reactant} and {towards}")]
    NoBarrier {
        /// reactant position
        reactant: f64,
        /// a description of the other end
        towards: String,
        /// whether the target was given
        target_given: bool,
    },
    /// The metastable default target does not exist in the domain.
    #[error(
        "U does not drop {drop} kT below the barrier top before the domain end at x = {end}: give states.target or widen potential.domain"
    )]
    NoTarget {
        /// required drop
        drop: f64,
        /// domain end
        end: f64,
    },
    /// The potential is unbounded below on the reactant side (the wall is lower than the well).
    #[error(
        "U at the reflecting wall x = {wall} is {below:.3} kT below the reactant minimum: the potential is unbounded below on the reactant side; narrow potential.domain"
    )]
    UnboundedBelow {
        /// wall position
        wall: f64,
        /// how far below
        below: f64,
    },
}

impl LandscapeError {
    /// The scenario key a user should look at.
    pub fn key(&self) -> &'static str {
        match self {
            Self::NotFinite { .. } | Self::NoMinimum { .. } | Self::UnboundedBelow { .. } => {
                "potential"
            }
            Self::NoBarrier { target_given, .. } => {
                if *target_given {
                    "states.target"
                } else {
                    "potential"
                }
            }
            Self::NoTarget { .. } => "states.target",
        }
    }
}

/// Kind of stationary point.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Kind {
    /// U'' > 0
    Minimum,
    /// U'' < 0
    Maximum,
}

/// A stationary point.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Stationary {
    /// position
    pub x: f64,
    /// U (kT)
    pub u: f64,
    /// U'' (kT/length²)
    pub curvature: f64,
    /// minimum or maximum
    pub kind: Kind,
}

/// How the target was chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum TargetRule {
    /// states.target
    Given,
    /// the product minimum
    ProductMinimum,
    /// 10 kT below the barrier top
    MetastableDrop,
}

/// The analysed landscape, internal units.
#[derive(Debug, Clone, Serialize)]
pub struct Landscape {
    /// all interior stationary points, by position
    pub points: Vec<Stationary>,
    /// reactant minimum x_a
    pub reactant: f64,
    /// barrier top x_b
    pub barrier: f64,
    /// product minimum beyond the barrier, if any
    pub product: Option<f64>,
    /// absorbing point
    pub target: f64,
    /// how the target was chosen
    pub target_rule: TargetRule,
    /// +1 if the target lies right of the reactant
    pub direction: f64,
    /// the reflecting wall behind the reactant
    pub wall: f64,
    /// U(x_a)
    pub u_reactant: f64,
    /// U(x_b)
    pub u_barrier: f64,
    /// U(product)
    pub u_product: Option<f64>,
    /// U(target)
    pub u_target: f64,
    /// E_b = U(x_b) - U(x_a) (kT)
    pub barrier_height: f64,
    /// U''(x_a)
    pub curvature_reactant: f64,
    /// |U''(x_b)|
    pub curvature_barrier: f64,
    /// ω_a (needs a mass)
    pub omega_reactant: Option<f64>,
    /// ω_b (needs a mass)
    pub omega_barrier: Option<f64>,
    /// I_b of the reactant-side orbit (needs a mass), kT·time
    pub action: Option<f64>,
    /// the same for the product-side orbit at the barrier energy
    pub action_product: Option<f64>,
    /// far turning point of the reactant orbit (the wall if U stays below U(x_b))
    pub turning_point: f64,
    /// stationary points taken for noise (prominence below the threshold), by position
    pub ignored: Vec<Stationary>,
    /// the fit of a table (which spline, χ², effective degrees of freedom)
    pub fit: Option<crate::potential::FitSummary>,
    /// warnings about the profile
    pub warnings: Vec<String>,
}

fn brent(f: impl Fn(f64) -> f64, a: f64, b: f64) -> f64 {
    // x-tolerance: 1e-15 of the bracket's scale; max_iter large (the crate's default is small)
    let mut conv = SimpleConvergency {
        eps: 1e-15 * (a.abs() + b.abs()).max(1e-300),
        max_iter: 1000,
    };
    find_root_brent(a, b, f, &mut conv).unwrap_or(0.5 * (a + b))
}

/// Finds and classifies the stationary points of `pot` inside its domain, without those that
/// [`significant`] drops as noise.
///
/// # Errors
/// U or U' not finite at a scan point.
pub fn stationary_points(pot: &dyn Potential) -> Result<Vec<Stationary>, LandscapeError> {
    Ok(significant(pot, all_stationary_points(pot)?).0)
}

/// Splits stationary points (sorted by x) into the significant ones and those taken for noise.
///
/// A minimum–maximum pair whose energy difference is below the potential's
/// [`Potential::prominence_threshold`] (the larger of its values at the two points) is cancelled,
/// smallest difference first. This is the persistence simplification of a 1-D function
/// (Edelsbrunner, Letscher & Zomorodian, Discrete Comput. Geom. 28, 511 (2002)): removing the
/// closest pair first guarantees that the neighbours left behind are the deeper minimum and the
/// higher maximum, so what survives does not depend on the order of the noise. A maximum next to
/// a domain end that rises less than the threshold above the end is a bump at the wall, not a
/// barrier, and is dropped alone; a minimum next to an end is judged against its inner neighbour
/// only (a reflecting wall has no basin beyond it to merge with). The last minimum is never
/// dropped.
pub fn significant(
    pot: &dyn Potential,
    mut pts: Vec<Stationary>,
) -> (Vec<Stationary>, Vec<Stationary>) {
    let mut dropped = Vec::new();
    let (lo, hi) = pot.domain();
    let (u_lo, u_hi) = (pot.u(lo), pot.u(hi));
    let thr = |p: &Stationary| pot.prominence_threshold(p.x);
    loop {
        // (difference, first index, how many points go); a candidate that would take the last
        // minimum is never offered
        let mut best: Option<(f64, usize, usize)> = None;
        let minima = pts.iter().filter(|p| p.kind == Kind::Minimum).count();
        let mut offer = |d: f64, i: usize, k: usize, limit: f64| {
            let gone = pts[i..i + k]
                .iter()
                .filter(|p| p.kind == Kind::Minimum)
                .count();
            if d < limit && gone < minima && best.is_none_or(|b| d < b.0) {
                best = Some((d, i, k));
            }
        };
        for i in 0..pts.len().saturating_sub(1) {
            let (a, b) = (&pts[i], &pts[i + 1]);
            if a.kind != b.kind {
                offer((a.u - b.u).abs(), i, 2, thr(a).max(thr(b)));
            }
        }
        // a maximum next to an end, barely above it, is a bump at the wall; a minimum next to an
        // end is judged against its other neighbour only (the wall has no basin beyond it)
        let ends = [
            (pts.first(), u_lo, 0),
            (pts.last(), u_hi, pts.len().saturating_sub(1)),
        ];
        for (p, u_end, i) in ends {
            if let Some(p) = p.filter(|p| p.kind == Kind::Maximum && p.u >= u_end) {
                offer(p.u - u_end, i, 1, thr(p));
            }
        }
        let Some((_, i, k)) = best else { break };
        dropped.extend(pts.drain(i..i + k));
    }
    dropped.sort_by(|a, b| a.x.total_cmp(&b.x));
    (pts, dropped)
}

/// Every stationary point of `pot` inside its domain, noise or not.
fn all_stationary_points(pot: &dyn Potential) -> Result<Vec<Stationary>, LandscapeError> {
    let (lo, hi) = pot.domain();
    let xs = match pot.stationary_points() {
        Some(xs) => xs,
        None => {
            let grid = pot.scan_points();
            let mut vals = Vec::with_capacity(grid.len());
            for &x in &grid {
                let (u, d) = (pot.u(x), pot.du(x));
                if !u.is_finite() {
                    return Err(LandscapeError::NotFinite { what: "U(x)", x });
                }
                if !d.is_finite() {
                    return Err(LandscapeError::NotFinite { what: "U'(x)", x });
                }
                vals.push(d);
            }
            let mut xs = Vec::new();
            for i in 0..grid.len() - 1 {
                let (a, b) = (vals[i], vals[i + 1]);
                // A pole between two samples: U jumps against what U' predicts (trapezoid rule).
                // Smooth potentials and kinks (abs) miss by far less than 1 kT per interval.
                let du = pot.u(grid[i + 1]) - pot.u(grid[i]);
                let trap = 0.5 * (a + b) * (grid[i + 1] - grid[i]);
                if (du - trap).abs() > 1.0 && (du - trap).abs() > 0.5 * (du.abs() + trap.abs()) {
                    return Err(LandscapeError::NotFinite {
                        what: "U(x) (a pole or jump between scan points)",
                        x: 0.5 * (grid[i] + grid[i + 1]),
                    });
                }
                if a == 0.0 {
                    if i > 0 {
                        xs.push(grid[i]);
                    }
                } else if a * b < 0.0 {
                    let r = brent(|x| pot.du(x), grid[i], grid[i + 1]);
                    // U' that changes sign without passing through zero is a pole or a jump
                    let d = pot.du(r);
                    if !(pot.u(r).is_finite() && d.is_finite())
                        || d.abs() > 1e-6 * a.abs().max(b.abs())
                    {
                        return Err(LandscapeError::NotFinite {
                            what: "U(x) (U' changes sign through a pole or jump)",
                            x: r,
                        });
                    }
                    xs.push(r);
                }
            }
            xs
        }
    };
    let span = hi - lo;
    let mut out = Vec::with_capacity(xs.len());
    for x in xs {
        if x <= lo || x >= hi {
            continue;
        }
        let c = pot.d2u(x);
        let kind = if c > 0.0 {
            Kind::Minimum
        } else if c < 0.0 {
            Kind::Maximum
        } else {
            // flat: compare neighbours
            let h = 1e-6 * span;
            if pot.u(x - h) > pot.u(x) && pot.u(x + h) > pot.u(x) {
                Kind::Minimum
            } else if pot.u(x - h) < pot.u(x) && pot.u(x + h) < pot.u(x) {
                Kind::Maximum
            } else {
                continue;
            }
        };
        out.push(Stationary {
            x,
            u: pot.u(x),
            curvature: c,
            kind,
        });
    }
    Ok(out)
}

/// Walks from `from` in direction `dir` over the scan grid until `f` changes sign, then refines.
fn first_crossing(pot: &dyn Potential, f: &dyn Fn(f64) -> f64, from: f64, dir: f64) -> Option<f64> {
    let (lo, hi) = pot.domain();
    let end = if dir > 0.0 { hi } else { lo };
    let n = 4000;
    let step = (end - from) / f64::from(n);
    let mut prev = from;
    let mut fp = f(prev);
    for i in 1..=n {
        let x = if i == n {
            end
        } else {
            from + step * f64::from(i)
        };
        let fx = f(x);
        if fp == 0.0 {
            return Some(prev);
        }
        if fp * fx <= 0.0 {
            let r = if fx == 0.0 {
                x
            } else {
                brent(f, prev.min(x), prev.max(x))
            };
            return Some(r);
        }
        prev = x;
        fp = fx;
    }
    None
}

/// ∫ sqrt(2m(E − U)) dx over [a, b] (E ≥ U inside), split at `mid`; double-exponential quadrature
/// copes with the square-root end points (Takahasi & Mori 1974).
fn orbit_half_action(pot: &dyn Potential, m: f64, e: f64, a: f64, b: f64, mids: &[f64]) -> f64 {
    let f = |x: f64| (2.0 * m * (e - pot.u(x)).max(0.0)).sqrt();
    let mut cuts: Vec<f64> = mids.iter().copied().filter(|&x| x > a && x < b).collect();
    cuts.insert(0, a);
    cuts.push(b);
    cuts.sort_by(f64::total_cmp);
    cuts.windows(2)
        .map(|w| {
            let scale = (2.0 * m * e.abs().max(1.0)).sqrt() * (w[1] - w[0]);
            quadrature::double_exponential::integrate(f, w[0], w[1], 1e-14 * scale).integral
        })
        .sum()
}

impl Landscape {
    /// Analyses the landscape.
    ///
    /// `start`: the reactant minimum is the one nearest this point (default: the lowest).
    /// `target`: the absorbing point (default: the product minimum; for a metastable well, where U
    /// has dropped [`METASTABLE_DROP_KT`] below the barrier top). `mass` enables frequencies and
    /// actions.
    ///
    /// # Errors
    /// See [`LandscapeError`].
    pub fn analyse(
        pot: &dyn Potential,
        start: Option<f64>,
        target: Option<f64>,
        mass: Option<f64>,
    ) -> Result<Self, LandscapeError> {
        let (lo, hi) = pot.domain();
        let (points, ignored) = significant(pot, all_stationary_points(pot)?);
        let minima: Vec<&Stationary> = points.iter().filter(|p| p.kind == Kind::Minimum).collect();
        let react = match start {
            Some(s) => minima
                .iter()
                .min_by(|a, b| (a.x - s).abs().total_cmp(&(b.x - s).abs())),
            None => minima.iter().min_by(|a, b| a.u.total_cmp(&b.u)),
        }
        .ok_or(LandscapeError::NoMinimum { lo, hi })?;
        let xa = react.x;
        let (direction, barrier) = escape_barrier(&points, xa, target)?;
        let xb = barrier.x;
        let ub = barrier.u;
        let product = if direction > 0.0 {
            points
                .iter()
                .find(|p| p.kind == Kind::Minimum && p.x > xb)
                .copied()
        } else {
            points
                .iter()
                .rev()
                .find(|p| p.kind == Kind::Minimum && p.x < xb)
                .copied()
        };
        let (target_x, rule) = match (target, product) {
            (Some(t), _) => (t, TargetRule::Given),
            (None, Some(p)) => (p.x, TargetRule::ProductMinimum),
            (None, None) => {
                let f = |x: f64| pot.u(x) - (ub - METASTABLE_DROP_KT);
                let end = if direction > 0.0 { hi } else { lo };
                let t = first_crossing(pot, &f, xb, direction).ok_or(LandscapeError::NoTarget {
                    drop: METASTABLE_DROP_KT,
                    end,
                })?;
                (t, TargetRule::MetastableDrop)
            }
        };
        let wall = if direction > 0.0 { lo } else { hi };
        let ua = react.u;
        if pot.u(wall) < ua - 1e-9 {
            return Err(LandscapeError::UnboundedBelow {
                wall,
                below: ua - pot.u(wall),
            });
        }
        let eb = ub - ua;
        let ka = react.curvature;
        let kb = barrier.curvature.abs();
        let omega_reactant = mass.map(|m| (ka / m).sqrt());
        let omega_barrier = mass.map(|m| (kb / m).sqrt());
        // reactant orbit: from the barrier back through the well to U = U_b (or the wall)
        let fb = |x: f64| pot.u(x) - ub;
        let turning = first_crossing(pot, &fb, xa, -direction).unwrap_or(wall);
        let inner: Vec<f64> = points.iter().map(|p| p.x).collect();
        let action = mass
            .map(|m| 2.0 * orbit_half_action(pot, m, ub, turning.min(xb), turning.max(xb), &inner));
        let action_product =
            match (mass, product) {
                (Some(m), Some(p)) => {
                    let far = first_crossing(pot, &fb, p.x, direction)
                        .unwrap_or(if direction > 0.0 { hi } else { lo });
                    Some(2.0 * orbit_half_action(pot, m, ub, far.min(xb), far.max(xb), &inner))
                }
                _ => None,
            };
        let u_target = pot.u(target_x);
        let mut l = Self {
            points,
            reactant: xa,
            barrier: xb,
            product: product.map(|p| p.x),
            target: target_x,
            target_rule: rule,
            direction,
            wall,
            u_reactant: ua,
            u_barrier: ub,
            u_product: product.map(|p| p.u),
            u_target,
            barrier_height: eb,
            curvature_reactant: ka,
            curvature_barrier: kb,
            omega_reactant,
            omega_barrier,
            action,
            action_product,
            turning_point: turning,
            ignored,
            fit: pot.fit().cloned(),
            warnings: Vec::new(),
        };
        l.warnings = l.notes(pot);
        Ok(l)
    }

    /// What a user should know about this landscape: points taken for noise, a low barrier, a
    /// target near the barrier top, and curvatures read off a coarse or noisy table.
    fn notes(&self, pot: &dyn Potential) -> Vec<String> {
        let (ignored, eb, rule) = (&self.ignored, self.barrier_height, self.target_rule);
        let (xa, xb, target_x) = (self.reactant, self.barrier, self.target);
        let (ka, kb) = (self.curvature_reactant, self.curvature_barrier);
        let (ub, u_target) = (self.u_barrier, self.u_target);
        let mut warnings = Vec::new();
        if !ignored.is_empty() {
            let most = ignored
                .iter()
                .map(|p| pot.prominence_threshold(p.x))
                .fold(0.0, f64::max);
            warnings.push(format!(
                "{} stationary point(s) of the fitted profile differ from a neighbour by less than the significance threshold ({most:.2} kT; potential.prominence) and were taken for noise",
                ignored.len()
            ));
        }
        if eb < LOW_BARRIER_KT {
            warnings.push(format!(
                "barrier {eb:.3} kT is below {LOW_BARRIER_KT} kT: no separation of time scales, the asymptotic rate formulas are unreliable; use the exact MFPT or simulation"
            ));
        }
        let drop = ub - u_target;
        let width_b = (1.0 / kb).sqrt();
        if rule != TargetRule::MetastableDrop
            && (drop < TARGET_DROP_WARN_KT || (target_x - xb).abs() < 2.0 * width_b)
        {
            warnings.push(format!(
                "the target at x = {target_x} is close to the barrier top ({drop:.2} kT below it, {:.2} thermal barrier widths away): particles that reach it may recross, so 1/MFPT underestimates the rate by up to 2x",
                (target_x - xb).abs() / width_b
            ));
        }
        if let Some(knots) = pot.knots() {
            warnings.push(
                "curvatures (and so frequencies and harmonic prefactors) come from the spline through the table: they are sensitive to noise in U".into(),
            );
            for (name, x, k) in [("reactant well", xa, ka), ("barrier", xb, kb)] {
                let i = knots.partition_point(|&v| v <= x).clamp(1, knots.len() - 1);
                let h = knots[i] - knots[i - 1];
                let rows = (1.0 / k).sqrt() / h;
                if rows < 3.0 {
                    warnings.push(format!(
                        "the {name} is {rows:.1} table rows per thermal width sqrt(kT/|U''|): the profile is too coarse for a reliable curvature"
                    ));
                }
            }
            let ratio = ka / kb;
            if !(1.0 / 25.0..=25.0).contains(&ratio) {
                warnings.push(format!(
                    "well and barrier curvatures differ by a factor {:.0}: check that the table is smooth (noise makes spikes in U'')",
                    ratio.max(1.0 / ratio)
                ));
            }
        }
        warnings
    }
}

/// The escape direction (+1 right, −1 left) and the barrier: the highest maximum between the
/// reactant and a given target, else the lower of the nearest maxima on either side.
fn escape_barrier(
    points: &[Stationary],
    xa: f64,
    target: Option<f64>,
) -> Result<(f64, Stationary), LandscapeError> {
    let maxima_between = |a: f64, b: f64| {
        points
            .iter()
            .filter(move |p| p.kind == Kind::Maximum && p.x > a.min(b) && p.x < a.max(b))
    };
    Ok(match target {
        Some(t) => {
            let dir = if t > xa { 1.0 } else { -1.0 };
            let b = maxima_between(xa, t)
                .max_by(|a, b| a.u.total_cmp(&b.u))
                .ok_or_else(|| LandscapeError::NoBarrier {
                    reactant: xa,
                    towards: format!(
                        "states.target = {t} (no maximum lies strictly between them: the target is inside the reactant well or at the barrier top)"
                    ),
                    target_given: true,
                })?;
            (dir, *b)
        }
        None => {
            let right = points.iter().find(|p| p.kind == Kind::Maximum && p.x > xa);
            let left = points
                .iter()
                .rev()
                .find(|p| p.kind == Kind::Maximum && p.x < xa);
            match (left, right) {
                (None, None) => {
                    return Err(LandscapeError::NoBarrier {
                        reactant: xa,
                        towards: "either domain end".into(),
                        target_given: false,
                    });
                }
                (Some(l), None) => (-1.0, *l),
                (None, Some(r)) => (1.0, *r),
                // both sides: escape over the lower barrier (ties go right)
                (Some(l), Some(r)) => {
                    if l.u < r.u {
                        (-1.0, *l)
                    } else {
                        (1.0, *r)
                    }
                }
            }
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::potential::Family;

    // Closed forms, PHYSICS.md §10 (quartic and cubic wells): omega_a = sqrt(8 Eb/(m a^2)),
    // omega_b = omega_a/sqrt(2), I_b = 16 Eb/(3 omega_b); cubic omega_a = omega_b =
    // sqrt(27 Eb/(2 m L^2)), I_b = 36 Eb/(5 omega_a). Tolerance 1e-10: quadrature error is ~1e-14,
    // the stationary points come from Brent to ~1e-15.
    #[test]
    fn quartic_and_cubic_closed_forms() {
        let (eb, a, m) = (5.0, 1.2, 1.7);
        let dw = Family::DoubleWell {
            eb,
            a,
            domain: (-3.0 * a, 3.0 * a),
        };
        let l = Landscape::analyse(&dw, Some(-1.0), None, Some(m)).unwrap();
        assert!((l.reactant + a).abs() < 1e-12 && l.barrier.abs() < 1e-12);
        assert!((l.target - a).abs() < 1e-12);
        let wa = (8.0 * eb / (m * a * a)).sqrt();
        assert!((l.omega_reactant.unwrap() / wa - 1.0).abs() < 1e-10);
        assert!((l.omega_barrier.unwrap() / (wa / 2f64.sqrt()) - 1.0).abs() < 1e-10);
        let ib = 16.0 * eb / (3.0 * wa / 2f64.sqrt());
        assert!((l.action.unwrap() / ib - 1.0).abs() < 1e-10);
        assert!((l.action_product.unwrap() / ib - 1.0).abs() < 1e-10);

        let (eb, ll) = (8.0, 1.5);
        let cu = Family::Cubic {
            eb,
            l: ll,
            domain: (-ll, 3.0 * ll),
        };
        let l = Landscape::analyse(&cu, None, None, Some(1.0)).unwrap();
        let w = (27.0 * eb / (2.0 * ll * ll)).sqrt();
        assert!((l.barrier - 2.0 * ll / 3.0).abs() < 1e-12);
        assert!((l.omega_reactant.unwrap() / w - 1.0).abs() < 1e-10);
        assert!((l.action.unwrap() / (36.0 * eb / (5.0 * w)) - 1.0).abs() < 1e-10);
        assert_eq!(l.target_rule, TargetRule::MetastableDrop);
        assert!((cu.u(l.target) - (eb - 10.0)).abs() < 1e-9);
        assert!((l.turning_point + ll / 3.0).abs() < 1e-12);
    }

    /// A potential given by its values at a few points (piecewise linear; only U at the ends and
    /// the threshold matter to `significant`).
    #[derive(Debug)]
    struct Ends {
        lo: f64,
        hi: f64,
        u_lo: f64,
        u_hi: f64,
        threshold: f64,
    }
    impl Potential for Ends {
        fn u(&self, x: f64) -> f64 {
            if x <= self.lo { self.u_lo } else { self.u_hi }
        }
        fn du(&self, _: f64) -> f64 {
            0.0
        }
        fn d2u(&self, _: f64) -> f64 {
            0.0
        }
        fn domain(&self) -> (f64, f64) {
            (self.lo, self.hi)
        }
        fn prominence_threshold(&self, _: f64) -> f64 {
            self.threshold
        }
    }

    fn pt(x: f64, u: f64, kind: Kind) -> Stationary {
        Stationary {
            x,
            u,
            curvature: if kind == Kind::Minimum { 1.0 } else { -1.0 },
            kind,
        }
    }

    // The persistence rule by hand (threshold 0.6 kT): a 0.3 kT noise pair inside a well goes, the
    // smallest pair first; the real 8 kT barrier and both wells stay; a well next to the wall stays
    // although the wall end is only 0.3 kT above it (a wall has no basin to merge with); a bump of
    // 0.2 kT at the far end goes alone.
    #[test]
    fn significance_keeps_wells_at_walls_and_drops_noise_pairs() {
        use Kind::{Maximum as Max, Minimum as Min};
        let pot = Ends {
            lo: 0.0,
            hi: 4.0,
            u_lo: 0.3,
            u_hi: -2.9,
            threshold: 0.6,
        };
        let pts = vec![
            pt(0.1, 0.0, Min),
            pt(1.0, 8.0, Max),
            pt(2.0, -3.0, Min),
            pt(2.2, -2.7, Max),
            pt(2.3, -2.9, Min),
            pt(3.9, -2.7, Max),
        ];
        let (kept, dropped) = significant(&pot, pts);
        let xs: Vec<f64> = kept.iter().map(|p| p.x).collect();
        assert_eq!(xs, vec![0.1, 1.0, 2.0], "{dropped:?}");
        assert_eq!(dropped.len(), 3);
        // the last minimum is never dropped, even when every pair is below the threshold
        let flat = Ends {
            threshold: 100.0,
            ..pot
        };
        let (kept, _) = significant(&flat, vec![pt(1.0, 0.0, Min), pt(2.0, 0.5, Max)]);
        assert_eq!(kept.len(), 1);
        assert_eq!(kept[0].kind, Min);
    }

    #[test]
    fn direction_and_errors() {
        let dw = Family::DoubleWell {
            eb: 5.0,
            a: 1.0,
            domain: (-3.0, 3.0),
        };
        let l = Landscape::analyse(&dw, Some(1.1), None, None).unwrap();
        assert_eq!(l.direction, -1.0);
        assert_eq!(l.wall, 3.0);
        let e = Landscape::analyse(&dw, Some(-1.0), Some(-2.0), None).unwrap_err();
        assert_eq!(e.key(), "states.target");
        let flat = Family::Washboard {
            amp: 0.0,
            period: 1.0,
            tilt: 1.0,
            domain: (0.0, 1.0),
        };
        assert!(matches!(
            Landscape::analyse(&flat, None, None, None),
            Err(LandscapeError::NoMinimum { .. })
        ));
    }
}
