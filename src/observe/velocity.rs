//! Friction and memory time from velocities: the velocity autocorrelation (VACF), the
//! Green–Kubo diffusion coefficient, the Einstein friction and the memory kernel by Volterra
//! inversion, with block-bootstrap intervals. Internal units: kT = 1, the samples' length and
//! time units.
//!
//! **Velocities** are given, or taken from positions by the central difference
//! v̂_n = (x_{n+1} − x_{n−1})/(2Δt). For a smooth path its error is O(Δt²)
//! (−Δt² x‴/6); v̂ is exactly the mean velocity over 2Δt, so the sampled VACF is C_v smoothed
//! by a triangle of half-width 2Δt (derived here): ⟨v̂²⟩ = ⟨v²⟩(1 − K(0)Δt²/3 + …) when v is
//! differentiable (friction with memory), but ⟨v̂²⟩ = ⟨v²⟩ f(2γΔt), f(a) = 2(a − 1 + e^{−a})/a²
//! ≈ 1 − a/3, when it is not (memoryless friction, C_v = (kT/m) e^{−γ|t|}): a first-order
//! bias of the equipartition mass and of γ ([`fd_factor`]); at lags ≥ 2Δt the smoothed
//! exponential is scaled by (sinh(γΔt)/(γΔt))² = 1 + O(Δt²). The Green–Kubo integral is not
//! biased: Δt Σ_k Ĉ(k) telescopes to the mean-square displacement, so D stays exact.
//!
//! **Friction from the VACF** C_v(t) = ⟨v(0)v(t)⟩: m = kT/⟨v²⟩ (equipartition) or given,
//! D = ∫₀^∞ C_v dt (Green–Kubo; Kubo, J. Phys. Soc. Jpn. 12, 570 (1957)) and γ = kT/(m D)
//! (Einstein). The integral is the trapezoid rule on the sampled lags (for exact velocities and
//! an exponential VACF it is high by (γΔt)²/12), truncated at the first lag W with
//! W ≥ c τ_abs(W), τ_abs(W) = 1/2 + Σ_{k≤W} |ρ(k)| in samples, c = [`WINDOW_C`]: Sokal's
//! automatic window (Madras & Sokal, J. Stat. Phys. 50, 109 (1988)) on |ρ|, so that a VACF with
//! negative lobes (memory, a cage) is integrated over its whole envelope and not cut where its
//! running integral is small. A particle held in a well has ∫C_v = 0 (its mean-square
//! displacement is bounded): then the Green–Kubo route gives no γ and the memory kernel is used.
//!
//! **Memory kernel** (Berne & Harp, Adv. Chem. Phys. 17, 63 (1970)). The generalised Langevin
//! equation m v̇ = −m ω² x − m ∫₀^t K(t − s) v(s) ds + R(t) with ⟨R(0)v(0)⟩ = 0 gives
//! dC_v/dt = −ω² ∫₀^t C_v ds − ∫₀^t K(s) C_v(t − s) ds (ω = 0 for a free particle; the kernel is
//! a friction rate: the crate's kernel γ(t) = (γ/τ) e^{−|t|/τ} of `system::System`, with
//! ∫₀^∞ K = γ). Differentiated once it is of the second kind and stable to invert:
//!
//!   K(t) C(0) = −C″(t) − ω² C(t) − ∫₀^t K(s) C′(t − s) ds,
//!
//! solved step by step with the trapezoid rule (C′(0) = 0 drops the unknown from the right)
//! and central differences C′, C″ of the sampled VACF (C even, so C(−Δt) = C(Δt)). Memoryless
//! friction inverts to a spike at t = 0 of area ≈ γ and K ≈ −γ³Δt/2 beyond. K(0) alone has a
//! first-order error: C‴ jumps at 0 (C‴(0±) = ∓K′(0)C(0)), so the second difference there gives
//! K(0) + K′(0)Δt/3, low by Δt/(3τ) relative for the exponential kernel; later lags are
//! O(Δt²). The exponential K = (γ/τ) e^{−t/τ} is therefore fitted by weighted least squares
//! on ln K over the lags from Δt on where K is resolved (K > 3 bootstrap standard errors),
//! weights K²/σ_K²; γ = A τ from the intercept ln A and slope −1/τ. Memoryless friction leaves
//! no resolved lag and no fit.
//!
//! **Intervals**: each trajectory is cut into consecutive blocks (≈ [`BLOCKS`] in all); lag
//! products are summed within blocks, so a resample of whole blocks with replacement (the block
//! bootstrap, Künsch, Ann. Stat. 17, 1217 (1989)) re-estimates every quantity on the same window;
//! the standard error is the resamples' standard deviation and the 95% interval their 2.5% and
//! 97.5% percentiles. Blocks must be long against the window (warned otherwise).

use super::DEFAULT_RESAMPLES;
use crate::{fit, seed};
use rand::RngExt;
use serde::Serialize;
use thiserror::Error;

/// Blocks of the block bootstrap (over all trajectories).
pub const BLOCKS: usize = 40;
/// Window constant: the window closes at W ≥ c τ_abs(W); c = 8 leaves e^{−8} ≈ 3·10⁻⁴ of an
/// exponential's integral outside.
pub const WINDOW_C: f64 = 8.0;
/// Most lags correlated (bounds the work, O(samples · lags)).
pub const MAX_LAGS: usize = 4096;
/// Most lags of the memory kernel (its inversion is O(lags²) per resample).
pub const MAX_KERNEL_LAGS: usize = 1024;
/// Fewest samples per block.
pub const MIN_BLOCK: usize = 100;
/// A blocks shorter than this many windows draws a warning (the bootstrap then misses the
/// correlation across block ends).
pub const BLOCK_WINDOWS: f64 = 10.0;
/// ∫C / ∫|C| below this (or a D interval reaching 0) marks a confined particle.
pub const CONFINED_RATIO: f64 = 0.05;
/// A kernel point counts as resolved above this many standard errors.
pub const RESOLVED_SE: f64 = 3.0;
/// Finite-difference velocities with γΔt above this draw a warning: f(2γΔt) − 1 ≈ −6.5% there.
pub const FD_WARN_GAMMA_DT: f64 = 0.1;
/// Given velocities with γΔt above this draw a warning: the trapezoid bias (γΔt)²/12 passes 2%.
pub const GIVEN_WARN_GAMMA_DT: f64 = 0.5;

/// A mistake in the input of the velocity analysis.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum VelocityError {
    /// A sample is NaN or infinite.
    #[error("trajectory {trajectory}: sample {index} is not a finite number")]
    NonFinite {
        /// trajectory (from 0)
        trajectory: usize,
        /// sample index
        index: usize,
    },
    /// A parameter is not positive (or not finite).
    #[error("{name} must be positive and finite, not {value}")]
    BadParameter {
        /// which parameter
        name: &'static str,
        /// its value
        value: f64,
    },
    /// Too few samples for the blocks of the error estimate.
    #[error(
        "{samples} velocity samples in all; at least {needed} are needed ({BLOCKS} blocks of {MIN_BLOCK})"
    )]
    TooShort {
        /// samples available
        samples: usize,
        /// samples needed
        needed: usize,
    },
    /// The velocity is always zero.
    #[error("the velocities are all zero")]
    NoVariance,
}

/// Where the velocities came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Origin {
    /// a velocity series
    Given,
    /// central differences of positions
    CentralDifference,
}

/// How the friction was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Route {
    /// γ = kT/(m D), D = ∫C_v (a free particle)
    GreenKubo,
    /// γ of the exponential kernel fit (confined, memory resolved)
    KernelFit,
    /// ∫K over the resolved lags (confined, memoryless at this sampling)
    KernelArea,
}

/// What the analysis needs besides the samples.
#[derive(Debug, Clone)]
pub struct Options {
    /// the mass (default: from equipartition, kT/⟨v²⟩)
    pub mass: Option<f64>,
    /// ω² = U″/m of a harmonic well (1/time²), for the force term of the kernel inversion
    /// (default: free particle; with positions, ⟨v²⟩/var(x) when the particle is confined)
    pub omega2: Option<f64>,
    /// var(x) of the positions beside given velocities: ω² = ⟨v²⟩/var(x) for a confined particle
    /// when `omega2` is not given (with positions it is computed from them)
    pub position_variance: Option<f64>,
    /// seed of the bootstrap
    pub seed: u64,
    /// bootstrap resamples
    pub resamples: usize,
}

impl Default for Options {
    fn default() -> Self {
        Self {
            mass: None,
            omega2: None,
            position_variance: None,
            seed: 1,
            resamples: DEFAULT_RESAMPLES,
        }
    }
}

/// An estimate with its bootstrap error.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Estimate {
    /// from all the data
    pub value: f64,
    /// standard deviation of the resamples
    pub se: f64,
    /// 2.5% and 97.5% percentiles of the resamples
    pub ci95: [f64; 2],
}

/// The Green–Kubo integration window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Window {
    /// lags integrated
    pub lags: usize,
    /// as a time
    pub time: f64,
    /// whether W ≥ c τ_abs(W) was reached (otherwise the largest lag computed)
    pub closed: bool,
    /// the rule, in words
    pub rule: String,
}

/// The exponential memory kernel K(t) = (γ/τ) e^{−t/τ} fitted to the inverted kernel.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct KernelFit {
    /// friction γ = ∫K (1/time)
    pub gamma: Estimate,
    /// memory time τ
    pub memory_time: Estimate,
    /// lags fitted (1..=points)
    pub points: usize,
    /// resamples whose fit failed (left out of the intervals)
    pub failed_resamples: usize,
}

/// The memory kernel from the Volterra inversion.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Kernel {
    /// (t, K(t), bootstrap standard error) at the sampled lags
    pub points: Vec<[f64; 3]>,
    /// ω² of the force term used (0: free particle)
    pub omega2: f64,
    /// the exponential fit, when at least three lags are resolved
    pub fit: Option<KernelFit>,
    /// ∫K over the resolved lags, ½K(0)Δt + Σ_{n≥1} K(nΔt)Δt (for memoryless friction the
    /// spike's area, (1 − e^{−γΔt})/Δt)
    pub resolved_area: Estimate,
    /// the method, in words
    pub rule: String,
}

/// Friction and memory from one set of velocity trajectories.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Friction {
    /// where the velocities came from
    pub origin: Origin,
    /// velocity samples in all
    pub samples: usize,
    /// sampling interval
    pub interval: f64,
    /// mean velocity (taken as 0 in the correlations: equilibrium)
    pub mean_velocity: f64,
    /// ⟨v²⟩
    pub v2: Estimate,
    /// the mass (from equipartition unless given)
    pub mass: Estimate,
    /// whether the mass was given
    pub mass_given: bool,
    /// (t, C_v(t)) up to the window
    pub vacf: Vec<[f64; 2]>,
    /// the Green–Kubo window
    pub window: Window,
    /// ∫C/∫|C| over the window (≈ 1 for a monotone VACF, ≈ 0 in a well)
    pub integral_ratio: f64,
    /// Green–Kubo D = ∫C_v dt
    pub diffusion: Estimate,
    /// whether the VACF integral vanishes (a particle in a well)
    pub confined: bool,
    /// the friction γ (1/time), by `gamma_route`
    pub gamma: Estimate,
    /// how γ was obtained
    pub gamma_route: Route,
    /// the memory kernel
    pub kernel: Kernel,
    /// relative bias of ⟨v²⟩ and γ from the central difference under memoryless friction,
    /// f(2γΔt) − 1 (finite-difference velocities only)
    pub fd_bias: Option<f64>,
    /// the stated error of the velocities, in words
    pub velocity_error: String,
    /// blocks of the bootstrap
    pub blocks: usize,
    /// resamples
    pub resamples: usize,
    /// how the intervals were made
    pub interval_rule: String,
    /// what the user should know
    pub warnings: Vec<String>,
}

/// A Green–Kubo γ is passed on to a scenario only when ∫C/∫|C| over the window is at least
/// this: in a well of curvature ω² the VACF carries a negative tail of area ≈ D·ω²W/γ inside the
/// window W ≈ 8/γ, so the integral is low by ≈ 8ω²/γ² and the ratio is ≈ (1 − x)/(1 + x) with
/// x = 8ω²/γ² (derived here for the overdamped harmonic VACF); 0.8 keeps x, the bias of γ, near
/// 10%.
pub const SCENARIO_RATIO: f64 = 0.8;
/// τ is passed on only when its standard error is at most this share of it (τ known to about a
/// factor 2 at 95%; a rougher τ would steer the memory formulas by noise).
pub const SCENARIO_TAU_REL_SE: f64 = 1.0 / 3.0;

/// The friction and memory time a scenario may take from the analysis, and why any is left out.
#[derive(Debug, Clone, PartialEq)]
pub struct ScenarioFriction {
    /// γ (1/time)
    pub friction: Option<f64>,
    /// τ of the exponential kernel (time)
    pub memory_time: Option<f64>,
    /// why γ or τ is left out, one sentence each
    pub left_out: Vec<String>,
}

impl Friction {
    /// The rule: γ only from the Green–Kubo route with ∫C/∫|C| ≥ [`SCENARIO_RATIO`] and a 95%
    /// interval above zero (a confined particle's kernel routes use a harmonic ω² and are
    /// reported, not passed on); τ only when that γ is, the exponential kernel fit is resolved,
    /// fails on at most a tenth of the resamples, its interval lies above zero and its standard
    /// error is at most [`SCENARIO_TAU_REL_SE`] of it.
    pub fn for_scenario(&self) -> ScenarioFriction {
        let mut left_out = Vec::new();
        let g = &self.gamma;
        let friction = if self.gamma_route != Route::GreenKubo {
            left_out.push(format!(
                "the VACF integral vanishes (∫C/∫|C| = {:.3}): the particle turns in its well before its velocity relaxes, and the velocities do not fix γ here",
                self.integral_ratio
            ));
            None
        } else if self.integral_ratio < SCENARIO_RATIO {
            left_out.push(format!(
                "∫C/∫|C| = {:.3} is below {SCENARIO_RATIO}: the well's pull cuts the Green–Kubo integral, so γ = {:.4e} is too high by an unknown factor",
                self.integral_ratio, g.value
            ));
            None
        } else if !(g.value > 0.0 && g.ci95[0] > 0.0) {
            left_out.push(format!(
                "the friction's 95% interval [{:e}, {:e}] reaches zero",
                g.ci95[0], g.ci95[1]
            ));
            None
        } else {
            Some(g.value)
        };
        let memory_time = match (&self.kernel.fit, friction) {
            (Some(fit), Some(_)) => {
                let t = &fit.memory_time;
                let good = t.value > 0.0
                    && t.ci95[0] > 0.0
                    && t.se <= SCENARIO_TAU_REL_SE * t.value
                    && fit.failed_resamples * 10 <= self.resamples;
                if !good {
                    left_out.push(format!(
                        "the kernel fit's τ = {:.4e} ± {:.4e} is not well determined",
                        t.value, t.se
                    ));
                }
                good.then_some(t.value)
            }
            _ => None,
        };
        ScenarioFriction {
            friction,
            memory_time,
            left_out,
        }
    }
}

/// Central-difference velocities (x_{n+1} − x_{n−1})/(2Δt) at samples 1..n−1 (two fewer than
/// the positions).
pub fn central_difference(x: &[f64], dt: f64) -> Vec<f64> {
    x.windows(3).map(|w| (w[2] - w[0]) / (2.0 * dt)).collect()
}

/// f(a) = 2(a − 1 + e^{−a})/a² at a = 2γΔt: ⟨v̂²⟩/⟨v²⟩ for central-difference velocities under
/// memoryless friction (see the module comment).
pub fn fd_factor(gamma_dt: f64) -> f64 {
    let a = 2.0 * gamma_dt;
    if a < 1e-4 {
        return 1.0 - a / 3.0 + a * a / 12.0;
    }
    2.0 * (a + (-a).exp_m1()) / (a * a)
}

/// Dot product with four accumulators (vectorises; the order is fixed, so results are too).
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut s = [0.0; 4];
    let (ca, cb) = (a.chunks_exact(4), b.chunks_exact(4));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        for i in 0..4 {
            s[i] += x[i] * y[i];
        }
    }
    let tail: f64 = ra.iter().zip(rb).map(|(x, y)| x * y).sum();
    (s[0] + s[1]) + (s[2] + s[3]) + tail
}

/// Lag-product sums per block: `sums[b][k]` = Σ v_t v_{t+k} within block b, `pairs[b][k]` their
/// count.
struct Blocks<'a> {
    blocks: Vec<&'a [f64]>,
    sums: Vec<Vec<f64>>,
    pairs: Vec<Vec<f64>>,
}

impl<'a> Blocks<'a> {
    fn new(trajs: &[&'a [f64]], len: usize) -> Self {
        let mut blocks = Vec::new();
        for t in trajs {
            let nb = (t.len() / len).max(1);
            for b in 0..nb {
                let end = if b + 1 == nb { t.len() } else { (b + 1) * len };
                blocks.push(&t[b * len..end]);
            }
        }
        let n = blocks.len();
        Self {
            blocks,
            sums: vec![Vec::new(); n],
            pairs: vec![Vec::new(); n],
        }
    }

    /// Adds lag k = the current length, returning the pooled C(k).
    fn push_lag(&mut self) -> f64 {
        let k = self.sums[0].len();
        let (mut s, mut p) = (0.0, 0.0);
        for (b, v) in self.blocks.iter().enumerate() {
            let (sb, pb) = if v.len() > k {
                (dot(&v[..v.len() - k], &v[k..]), (v.len() - k) as f64)
            } else {
                (0.0, 0.0)
            };
            self.sums[b].push(sb);
            self.pairs[b].push(pb);
            s += sb;
            p += pb;
        }
        if p > 0.0 { s / p } else { 0.0 }
    }

    /// C(k) for k < lags under block weights `w`.
    fn vacf(&self, w: &[f64], lags: usize) -> Vec<f64> {
        (0..lags)
            .map(|k| {
                let (mut s, mut p) = (0.0, 0.0);
                for (b, &wb) in w.iter().enumerate() {
                    s += wb * self.sums[b][k];
                    p += wb * self.pairs[b][k];
                }
                if p > 0.0 { s / p } else { 0.0 }
            })
            .collect()
    }
}

/// Trapezoid ∫₀^{WΔt} C over lags 0..=w.
fn trapezoid(c: &[f64], w: usize, dt: f64) -> f64 {
    dt * (0.5 * c[0] + c[1..w].iter().sum::<f64>() + 0.5 * c[w])
}

/// The memory kernel K(nΔt), n < `lags`, from the VACF `c` (needs `lags + 1` values) by the
/// second-kind Volterra inversion of the module comment, with the force term ω².
pub fn volterra_kernel(c: &[f64], dt: f64, omega2: f64, lags: usize) -> Vec<f64> {
    let lags = lags.min(c.len().saturating_sub(1));
    let at = |n: isize| c[n.unsigned_abs()];
    let d1: Vec<f64> = (0..lags as isize)
        .map(|n| (at(n + 1) - at(n - 1)) / (2.0 * dt))
        .collect();
    let mut k = Vec::with_capacity(lags);
    for n in 0..lags {
        let i = n as isize;
        let d2 = (at(i + 1) - 2.0 * at(i) + at(i - 1)) / (dt * dt);
        // trapezoid of ∫₀^t K(s) C′(t − s) ds; the K_n term carries C′(0) = 0
        let conv = if n == 0 {
            0.0
        } else {
            dt * (0.5 * k[0] * d1[n] + (1..n).map(|j| k[j] * d1[n - j]).sum::<f64>())
        };
        k.push((-d2 - omega2 * c[n] - conv) / c[0]);
    }
    k
}

/// Weighted least squares of ln K = ln A − t/τ over lags 1..=points with standard errors `se`:
/// (γ = Aτ, τ), or None when a point is not positive or the slope does not decay.
fn fit_kernel(k: &[f64], se: &[f64], dt: f64, points: usize) -> Option<(f64, f64)> {
    let lags = 1..=points;
    if k[lags.clone()].iter().any(|&v| v <= 0.0) {
        return None;
    }
    let t: Vec<f64> = lags.clone().map(|n| n as f64 * dt).collect();
    let y: Vec<f64> = k[lags.clone()].iter().map(|v| v.ln()).collect();
    let s: Vec<f64> = lags.map(|n| se[n] / k[n]).collect();
    let line = fit::line(&t, &y, Some(&s))?;
    if line.slope >= 0.0 {
        return None;
    }
    let tau = -1.0 / line.slope;
    Some((line.intercept.exp() * tau, tau))
}

/// Mean and standard deviation (n − 1).
fn mean_sd(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0).max(1.0);
    (m, var.sqrt())
}

/// The estimate `value` with the spread of its resamples `draws`.
fn estimate(value: f64, draws: &mut [f64]) -> Estimate {
    if draws.is_empty() {
        return Estimate {
            value,
            se: f64::NAN,
            ci95: [f64::NAN; 2],
        };
    }
    draws.sort_by(f64::total_cmp);
    let q = |p: f64| {
        let pos = p * (draws.len() - 1) as f64;
        let lo = pos.floor() as usize;
        let hi = (lo + 1).min(draws.len() - 1);
        draws[lo] + (pos - lo as f64) * (draws[hi] - draws[lo])
    };
    Estimate {
        value,
        se: mean_sd(draws).1,
        ci95: [q(0.025), q(0.975)],
    }
}

fn check(trajs: &[&[f64]], dt: f64, opts: &Options) -> Result<(), VelocityError> {
    let positive = |name, value: f64| {
        if value > 0.0 && value.is_finite() {
            Ok(())
        } else {
            Err(VelocityError::BadParameter { name, value })
        }
    };
    positive("the sampling interval", dt)?;
    if let Some(m) = opts.mass {
        positive("the mass", m)?;
    }
    if let Some(w) = opts.omega2
        && !(w >= 0.0 && w.is_finite())
    {
        return Err(VelocityError::BadParameter {
            name: "ω²",
            value: w,
        });
    }
    if opts.resamples < 2 {
        return Err(VelocityError::BadParameter {
            name: "the number of resamples",
            value: opts.resamples as f64,
        });
    }
    for (trajectory, t) in trajs.iter().enumerate() {
        if let Some(index) = t.iter().position(|v| !v.is_finite()) {
            return Err(VelocityError::NonFinite { trajectory, index });
        }
    }
    Ok(())
}

/// Friction and memory from velocity trajectories sampled every `dt`.
///
/// # Errors
/// A non-finite sample, a non-positive interval or mass, fewer than [`BLOCKS`]·[`MIN_BLOCK`]
/// samples, or velocities that are all zero.
pub fn from_velocities(
    trajs: &[&[f64]],
    dt: f64,
    opts: &Options,
) -> Result<Friction, VelocityError> {
    check(trajs, dt, opts)?;
    let var_x = opts.position_variance.filter(|v| v.is_finite() && *v > 0.0);
    analyse(trajs, dt, opts, Origin::Given, var_x)
}

/// Friction and memory from position trajectories sampled every `dt`, through central-difference
/// velocities (see the module comment for their error).
///
/// # Errors
/// As [`from_velocities`].
pub fn from_positions(
    trajs: &[&[f64]],
    dt: f64,
    opts: &Options,
) -> Result<Friction, VelocityError> {
    check(trajs, dt, opts)?;
    let vs: Vec<Vec<f64>> = trajs.iter().map(|x| central_difference(x, dt)).collect();
    let refs: Vec<&[f64]> = vs.iter().map(Vec::as_slice).collect();
    // position variance about the mean, for ω² of a well
    let (mut n, mut s, mut s2) = (0.0, 0.0, 0.0);
    let shift = trajs.iter().find_map(|t| t.first()).copied().unwrap_or(0.0);
    for &x in trajs.iter().flat_map(|t| t.iter()) {
        n += 1.0;
        s += x - shift;
        s2 += (x - shift).powi(2);
    }
    let var_x = (s2 - s * s / n) / (n - 1.0).max(1.0);
    analyse(&refs, dt, opts, Origin::CentralDifference, Some(var_x))
}

#[allow(clippy::too_many_lines)]
fn analyse(
    trajs: &[&[f64]],
    dt: f64,
    opts: &Options,
    origin: Origin,
    var_x: Option<f64>,
) -> Result<Friction, VelocityError> {
    let samples: usize = trajs.iter().map(|t| t.len()).sum();
    let needed = BLOCKS * MIN_BLOCK;
    if samples < needed {
        return Err(VelocityError::TooShort { samples, needed });
    }
    let mut warnings = Vec::new();
    let block_len = samples / BLOCKS;
    let mut blocks = Blocks::new(trajs, block_len);
    let c0 = blocks.push_lag();
    if c0 <= 0.0 {
        return Err(VelocityError::NoVariance);
    }
    // the window on |ρ|, computing lags as it goes
    let max_lag = (block_len / 4).clamp(2, MAX_LAGS);
    let mut c = vec![c0];
    let mut tau_abs = 0.5;
    let mut window = None;
    for k in 1..=max_lag {
        let ck = blocks.push_lag();
        c.push(ck);
        tau_abs += (ck / c0).abs();
        if window.is_none() && k as f64 >= WINDOW_C * tau_abs {
            window = Some(k);
        }
        // one lag past the window for the second difference of the kernel
        if window.is_some_and(|w| k > w) {
            break;
        }
    }
    let closed = window.is_some();
    let w = window.unwrap_or(max_lag - 1);
    if !closed {
        warnings.push(format!(
            "the VACF window did not close within {max_lag} lags (blocks of {block_len} samples): \
             the trajectories are too short for the velocity correlation, and D and γ are uncertain \
             beyond their intervals"
        ));
    } else if (block_len as f64) < BLOCK_WINDOWS * w as f64 {
        warnings.push(format!(
            "bootstrap blocks ({block_len} samples) are shorter than {BLOCK_WINDOWS} VACF windows \
             ({w} lags): the intervals may be too narrow"
        ));
    }
    let nb = blocks.blocks.len();
    let klags = w.min(MAX_KERNEL_LAGS);

    // the quantities of one VACF: (⟨v²⟩, m, D, ∫|C|, kernel)
    let given_mass = opts.mass;
    let derive = |c: &[f64], omega2: f64| {
        let v2 = c[0];
        let m = given_mass.unwrap_or(1.0 / v2);
        let d = trapezoid(c, w, dt);
        let abs_int =
            dt * (0.5 * c[0] + c[1..w].iter().map(|v| v.abs()).sum::<f64>() + 0.5 * c[w].abs());
        (v2, m, d, abs_int, volterra_kernel(c, dt, omega2, klags))
    };
    let (v2, mass, d, abs_int, _) = derive(&c, 0.0);
    let integral_ratio = d / abs_int;

    // bootstrap weights, drawn before anything depends on the data's outcome
    let mut rng = seed::stream(seed::derive(opts.seed, seed::VELOCITY_BOOTSTRAP), 0);
    let weights: Vec<Vec<f64>> = (0..opts.resamples)
        .map(|_| {
            let mut wb = vec![0.0; nb];
            for _ in 0..nb {
                wb[rng.random_range(0..nb)] += 1.0;
            }
            wb
        })
        .collect();
    let resampled: Vec<Vec<f64>> = weights.iter().map(|wb| blocks.vacf(wb, w + 2)).collect();
    let mut d_draws: Vec<f64> = resampled.iter().map(|cr| trapezoid(cr, w, dt)).collect();
    let d_est = estimate(d, &mut d_draws);
    let confined = integral_ratio < CONFINED_RATIO || d_est.ci95[0] <= 0.0;

    // ω² of the force term
    let omega2 = match (opts.omega2, confined, var_x) {
        (Some(o), _, _) => o,
        (None, true, Some(vx)) if vx > 0.0 => {
            warnings.push(format!(
                "ω² = ⟨v²⟩/var(x) = {:.4e} (harmonic approximation of the well) enters the kernel \
                 inversion",
                v2 / vx
            ));
            v2 / vx
        }
        (None, true, _) => {
            warnings.push(
                "the particle is confined but no ω² was given: the inverted kernel includes the \
                 well's constant ω² and its fit is not the friction"
                    .into(),
            );
            0.0
        }
        (None, false, _) => 0.0,
    };
    let kern = volterra_kernel(&c, dt, omega2, klags);

    let mut v2_draws = Vec::with_capacity(opts.resamples);
    let mut m_draws = Vec::with_capacity(opts.resamples);
    let mut g_draws = Vec::with_capacity(opts.resamples);
    let mut k_draws = Vec::with_capacity(opts.resamples);
    for cr in &resampled {
        let (v2r, mr, dr, _, kr) = derive(cr, omega2);
        v2_draws.push(v2r);
        m_draws.push(mr);
        g_draws.push(1.0 / (mr * dr));
        k_draws.push(kr);
    }
    let k_se: Vec<f64> = (0..klags)
        .map(|n| mean_sd(&k_draws.iter().map(|k| k[n]).collect::<Vec<_>>()).1)
        .collect();
    // resolved lags from 1 (K(0) carries an O(Δt) error and, without memory, the spike)
    let points = (1..klags)
        .take_while(|&n| kern[n] > RESOLVED_SE * k_se[n])
        .count();
    let fit = if points >= 3 {
        fit_kernel(&kern, &k_se, dt, points).map(|(g, tau)| {
            let mut gs = Vec::new();
            let mut ts = Vec::new();
            for kr in &k_draws {
                if let Some((gr, tr)) = fit_kernel(kr, &k_se, dt, points) {
                    gs.push(gr);
                    ts.push(tr);
                }
            }
            KernelFit {
                failed_resamples: opts.resamples - gs.len(),
                gamma: estimate(g, &mut gs),
                memory_time: estimate(tau, &mut ts),
                points,
            }
        })
    } else {
        None
    };
    if fit.is_none() {
        warnings.push(format!(
            "the memory kernel is resolved at {points} lag(s) only: the memory time is shorter than \
             about the sampling interval {dt:.4e} (memoryless friction at this resolution), or the \
             data are too few"
        ));
    }
    if let Some(f) = &fit
        && f.failed_resamples * 10 > opts.resamples
    {
        warnings.push(format!(
            "the kernel fit failed on {} of {} resamples: its intervals are uncertain",
            f.failed_resamples, opts.resamples
        ));
    }

    // ∫K over the resolved lags: ½K₀Δt + Σ_{1..=points} K_n Δt (the spike's area when memoryless)
    let area = |k: &[f64]| dt * (0.5 * k[0] + k[1..=points].iter().sum::<f64>());
    let mut area_draws: Vec<f64> = k_draws.iter().map(|k| area(k)).collect();
    let resolved_area = estimate(area(&kern), &mut area_draws);
    let (gamma, gamma_route) = if confined {
        warnings.push(format!(
            "the VACF integral vanishes (∫C/∫|C| = {integral_ratio:.3}, D interval [{:.3e}, {:.3e}]): \
             the particle is confined, Green–Kubo gives no friction; γ comes from the memory kernel",
            d_est.ci95[0], d_est.ci95[1]
        ));
        match &fit {
            Some(f) => (f.gamma, Route::KernelFit),
            None => (resolved_area, Route::KernelArea),
        }
    } else {
        (estimate(1.0 / (mass * d), &mut g_draws), Route::GreenKubo)
    };
    let gamma_ref = Some(gamma.value).filter(|g| *g > 0.0);

    // velocity error and sampling warnings
    let (fd_bias, velocity_error) = match origin {
        Origin::Given => (
            None,
            "velocities as given; the trapezoid integral of a VACF sampled every Δt is high by \
             about (γΔt)²/12"
                .to_string(),
        ),
        Origin::CentralDifference => (
            gamma_ref.map(|g| fd_factor(g * dt) - 1.0),
            "central differences (x[n+1] − x[n−1])/(2Δt): O(Δt²) error for a smooth path; they \
             average v over 2Δt, so ⟨v²⟩ (hence 1/m and γ) is low by f(2γΔt) − 1 ≈ −(2/3)γΔt \
             under memoryless friction (fd_bias), by ≈ K(0)Δt²/3 with memory; D is unaffected"
                .to_string(),
        ),
    };
    if let Some(g) = gamma_ref {
        let gdt = g * dt;
        match origin {
            Origin::CentralDifference if gdt > FD_WARN_GAMMA_DT => warnings.push(format!(
                "the sampling interval is {gdt:.3}/γ, not small against the velocity relaxation \
                 time 1/γ: finite-difference velocities lower ⟨v²⟩ and γ by up to {:.1}% \
                 (memoryless friction) and raise the mass as much",
                100.0 * (1.0 - fd_factor(gdt))
            )),
            Origin::Given if gdt > GIVEN_WARN_GAMMA_DT => warnings.push(format!(
                "the sampling interval is {gdt:.3}/γ: the VACF is resolved by few lags and the \
                 Green–Kubo integral is high by about {:.1}%",
                100.0 * gdt * gdt / 12.0
            )),
            _ => {}
        }
    }
    let mean_velocity = {
        let s: f64 = trajs.iter().flat_map(|t| t.iter()).sum();
        s / samples as f64
    };
    let total = samples as f64 * dt;
    let mean_se = (2.0 * d.abs() / total).sqrt();
    if !confined && mean_velocity.abs() > 4.0 * mean_se {
        warnings.push(format!(
            "the mean velocity {mean_velocity:.3e} is {:.1} standard errors from 0: a drift; the \
             analysis assumes equilibrium",
            mean_velocity.abs() / mean_se
        ));
    }
    let v2_est = estimate(v2, &mut v2_draws);
    if let Some(m) = given_mass {
        let kt = m * v2;
        if (kt - 1.0).abs() > 0.05 && (kt - 1.0).abs() > 4.0 * m * v2_est.se {
            warnings.push(format!(
                "m⟨v²⟩ = {kt:.4} kT, not 1: the velocities are not at the temperature (or the mass \
                 is not theirs)"
            ));
        }
    }
    let mass_est = match given_mass {
        Some(m) => Estimate {
            value: m,
            se: 0.0,
            ci95: [m, m],
        },
        None => estimate(mass, &mut m_draws),
    };
    Ok(Friction {
        origin,
        samples,
        interval: dt,
        mean_velocity,
        v2: v2_est,
        mass: mass_est,
        mass_given: given_mass.is_some(),
        vacf: c[..=w]
            .iter()
            .enumerate()
            .map(|(k, &v)| [k as f64 * dt, v])
            .collect(),
        window: Window {
            lags: w,
            time: w as f64 * dt,
            closed,
            rule: format!(
                "trapezoid to the first lag W ≥ {WINDOW_C}·(1/2 + Σ|ρ|) (Sokal's window on |ρ|)"
            ),
        },
        integral_ratio,
        diffusion: d_est,
        confined,
        gamma,
        gamma_route,
        kernel: Kernel {
            points: (0..klags)
                .map(|n| [n as f64 * dt, kern[n], k_se[n]])
                .collect(),
            omega2,
            fit,
            resolved_area,
            rule: format!(
                "second-kind Volterra inversion (Berne & Harp 1970), trapezoid; exponential fit by \
                 weighted least squares on ln K over the lags from Δt on above {RESOLVED_SE} standard errors"
            ),
        },
        fd_bias,
        velocity_error,
        blocks: nb,
        resamples: opts.resamples,
        interval_rule: format!(
            "block bootstrap: {} resamples of {nb} blocks; se = their standard deviation, 95% = \
             their 2.5% and 97.5% percentiles",
            opts.resamples
        ),
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // C = e^{−γ|t|} exactly (memoryless): the inversion gives a spike of area ½K₀Δt = (1 − e^{−γΔt})/Δt
    // ≈ γ at t = 0 and K₁ = −(1 − e^{−γΔt})³/(2Δt²) (derived by hand from the recursion), so
    // 1e-9 is rounding only.
    #[test]
    fn memoryless_kernel_is_a_spike() {
        let (g, dt) = (2.0_f64, 0.01);
        let c: Vec<f64> = (0..50).map(|k| (-g * k as f64 * dt).exp()).collect();
        let k = volterra_kernel(&c, dt, 0.0, 40);
        let e = 1.0 - (-g * dt).exp();
        assert!((0.5 * k[0] * dt - e / dt).abs() < 1e-9);
        assert!((k[1] + e.powi(3) / (2.0 * dt * dt)).abs() < 1e-9);
        // beyond: a small negative constant, −(1 − e^{−γΔt})³/(2Δt²) ≈ −γ³Δt/2 (by hand)
        assert!(
            k[1..].iter().all(|&v| v < 0.0 && v > -g.powi(3) * dt),
            "{k:?}"
        );
    }

    // The exact VACF of the exponential-kernel GLE (eigenvalues λ² + λ/τ + γ/τ = 0, C(0) = 1,
    // C′(0) = 0) inverts to (γ/τ) e^{−t/τ}; the error is that of the trapezoid and of the central
    // differences, O(Δt²/τ²) ≈ 1e-4 relative at Δt = τ/100, so 1e-3.
    #[test]
    fn exponential_kernel_inverts() {
        for (g, tau) in [(1.0_f64, 0.5_f64), (1.0, 2.0), (3.0, 0.05)] {
            let dt = tau / 100.0;
            let disc = 1.0 / (tau * tau) - 4.0 * g / tau;
            let s = -0.5 / tau;
            let c: Vec<f64> = (0..600)
                .map(|k| {
                    let t = k as f64 * dt;
                    // C = e^{st}(cos qt − (s/q) sin qt) for complex roots s ± iq, likewise cosh/sinh
                    if disc < 0.0 {
                        let q = 0.5 * (-disc).sqrt();
                        (s * t).exp() * ((q * t).cos() - s / q * (q * t).sin())
                    } else {
                        let q = 0.5 * disc.sqrt();
                        (s * t).exp() * ((q * t).cosh() - s / q * (q * t).sinh())
                    }
                })
                .collect();
            let k = volterra_kernel(&c, dt, 0.0, 500);
            // K(0): the second difference across the kink of C‴ at 0 is off by (γ/τ)(Δt/τ)/3
            assert!(((k[0] - g / tau) / (g / tau) + dt / (3.0 * tau)).abs() < 1e-3);
            for (n, kn) in k.iter().enumerate().skip(1).step_by(25) {
                let exact = g / tau * (-(n as f64) * dt / tau).exp();
                assert!(
                    (kn - exact).abs() < 1e-3 * g / tau,
                    "γ={g} τ={tau} n={n}: {kn} vs {exact}"
                );
            }
        }
    }

    // f(a) = 2(a − 1 + e^{−a})/a²: f → 1 − a/3 for small a; f(1) = 2/e (derived here).
    #[test]
    fn fd_factor_limits() {
        assert!((fd_factor(0.5) - 2.0 / std::f64::consts::E).abs() < 1e-12);
        assert!((fd_factor(1e-6) - (1.0 - 2e-6 / 3.0)).abs() < 1e-12);
        // the series and the closed form meet at a = 1e-4 (γΔt = 5e-5)
        assert!((fd_factor(5e-5 * (1.0 - 1e-9)) - fd_factor(5e-5 * (1.0 + 1e-9))).abs() < 1e-12);
    }

    #[test]
    fn bad_inputs_are_errors() {
        let o = Options::default();
        let x = vec![0.5; 10];
        assert!(matches!(
            from_velocities(&[&x], 0.1, &o),
            Err(VelocityError::TooShort { .. })
        ));
        let z = vec![0.0; 10_000];
        assert!(matches!(
            from_velocities(&[&z], 0.1, &o),
            Err(VelocityError::NoVariance)
        ));
        let mut y = vec![1.0; 10_000];
        y[7] = f64::NAN;
        assert!(matches!(
            from_velocities(&[&z, &y], 0.1, &o),
            Err(VelocityError::NonFinite {
                trajectory: 1,
                index: 7
            })
        ));
        assert!(matches!(
            from_positions(&[&z], 0.0, &o),
            Err(VelocityError::BadParameter { .. })
        ));
    }
}
