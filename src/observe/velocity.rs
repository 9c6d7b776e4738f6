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
//! running integral is small. Green–Kubo is exact for a free particle only: a well's force
//! removes a share φ (below) of the velocity correlation within the window, and then γ_GK =
//! γ/(1 − φ) for memoryless friction (integrate the equation below over the window: C(0) =
//! ∫F + γ∫C, derived here); held in a well, φ → 1 and ∫C_v → 0.
//!
//! **Memory kernel with the observed force** (Berne & Harp, Adv. Chem. Phys. 17, 63 (1970) for
//! the second-kind inversion; the force correlation ⟨U′(x(t)) v(0)⟩ in place of a harmonic term
//! as in Kowalik et al., Phys. Rev. E 100, 012126 (2019), from memory). The generalised Langevin
//! equation m v̇ = −U′(x) − m ∫₀^t K(t − s) v(s) ds + R(t), multiplied by v(0) and averaged with
//! ⟨R(t)v(0)⟩ = 0, gives
//!
//!   C′(t) = −F(t) − ∫₀^t K(s) C(t − s) ds,   F(t) = ⟨U′(x(t)) v(0)⟩/m
//!
//! (the kernel is a friction rate: the crate's kernel γ(t) = (γ/τ) e^{−|t|/τ} of
//! `system::System`, with ∫₀^∞ K = γ; U = 0 for a free particle, U′ = mω²x gives the harmonic
//! F = ω²∫₀^t C). Differentiated once it is of the second kind and stable to invert:
//!
//!   K(t) C(0) = −C″(t) − F′(t) − ∫₀^t K(s) C′(t − s) ds,
//!
//! solved step by step with the trapezoid rule (C′(0) = 0 drops the unknown from the right) and
//! central differences C′, C″, F′ of the sampled correlations (C even, so C(−Δt) = C(Δt); F at
//! lag −Δt is measured, ⟨U′(x_t) v_{t+1}⟩). U′ is the slope of the weighted cubic smoothing
//! spline through the observed free energy U = −ln p(x) (`potential::smooth`, weights 1/σ_U²,
//! α by the unbiased-risk rule for independent bins), continued linearly beyond the end bins.
//! Its bias: the spline's smoothing, which the risk rule trades against σ_U (it flattens U′
//! where U‴ is large against the noise), and the bins' average of p, O(h²U‴) for bin width h;
//! an error δU′ enters K as ⟨δU′(x(t)) v(0)⟩′/(m C(0)), so a relative error ε of U′ moves K by
//! about εω² against K(0) ≈ γ/τ (2γ/Δt for memoryless friction). The force share
//! φ = ∫₀^W F dt / C(0) says how much the well takes from the Green–Kubo integral.
//!
//! Memoryless friction inverts to a spike at t = 0 of area A = ½K(0)Δt = (1 − e^{−γΔt})/Δt for
//! an exponential VACF (exactly; BAOAB's O step gives that VACF), and K ≈ −γ³Δt/2 beyond; its
//! γ = −ln(1 − AΔt)/Δt ([`Kernel::memoryless_gamma`]). K(0) alone has a first-order error with
//! memory: C‴ jumps at 0 (C‴(0±) = ∓K′(0)C(0)), so the second difference there gives
//! K(0) + K′(0)Δt/3, low by Δt/(3τ) relative for the exponential kernel; later lags are O(Δt²).
//! The exponential K = (γ/τ) e^{−t/τ} is therefore fitted by weighted least squares on ln K over
//! the lags from Δt on where K is resolved (K > 3 bootstrap standard errors), weights K²/σ_K²;
//! γ = A τ from the intercept ln A and slope −1/τ.
//!
//! **Route**: with positions (always, through `observe`), Green–Kubo gives γ while the observed
//! force's share φ ≤ [`FREE_SHARE`] (a free particle: Green–Kubo is exact and the more precise;
//! at the switch both routes agree within 2%), else the kernel: its fit where the memory is
//! resolved, else the memoryless γ of the spike. Both are reported. Without positions the
//! particle is taken as free, and ∫C/∫|C| < [`CONFINED_RATIO`] only warns.
//!
//! **Intervals**: each trajectory is cut into consecutive blocks (≈ [`BLOCKS`] in all); lag
//! products (v·v and, with positions, v·U′) are summed within blocks, so a resample of whole blocks with replacement (the block
//! bootstrap, Künsch, Ann. Stat. 17, 1217 (1989)) re-estimates every quantity on the same window;
//! the standard error is the resamples' standard deviation and the 95% interval their 2.5% and
//! 97.5% percentiles. Blocks must be long against the window (warned otherwise).

use super::DEFAULT_RESAMPLES;
use super::free_energy::FreeEnergy;
use crate::potential::smooth;
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
/// Without positions: ∫C / ∫|C| below this (or a D interval reaching 0) marks a confined
/// particle.
pub const CONFINED_RATIO: f64 = 0.05;
/// With the observed mean force: Green–Kubo is used while the force share φ is at most this
/// (Green–Kubo's γ is then high by φ/(1 − φ) ≤ 2%, below the usual standard error, and both
/// routes agree where the choice switches).
pub const FREE_SHARE: f64 = 0.02;
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
    /// Positions and velocities of different lengths.
    #[error("trajectory {trajectory}: as many positions as velocities are needed")]
    Lengths {
        /// trajectory (from 0)
        trajectory: usize,
    },
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
    /// the mean force U′(x) of the observed free energy, for the force term of the kernel
    /// inversion (used with positions; without it the particle is taken as free)
    pub force: Option<MeanForce>,
    /// seed of the bootstrap
    pub seed: u64,
    /// bootstrap resamples
    pub resamples: usize,
}

impl Default for Options {
    fn default() -> Self {
        Self {
            mass: None,
            force: None,
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
    /// whether the observed mean force entered the inversion (false: a free particle)
    pub force_term: bool,
    /// the exponential fit, when at least three lags are resolved
    pub fit: Option<KernelFit>,
    /// ∫K over the resolved lags, ½K(0)Δt + Σ_{n≥1} K(nΔt)Δt (for memoryless friction the
    /// spike's area, (1 − e^{−γΔt})/Δt)
    pub resolved_area: Estimate,
    /// the memoryless friction of that area, −ln(1 − AΔt)/Δt (the spike of an exponential VACF
    /// sampled every Δt has A = (1 − e^{−γΔt})/Δt); NaN when AΔt ≥ 1
    pub memoryless_gamma: Estimate,
    /// the method, in words
    pub rule: String,
}

/// The observed mean force in the kernel inversion.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ForceTerm {
    /// φ = ∫₀^W ⟨U′(x(t)) v(0)⟩ dt / (m⟨v²⟩): the share of the velocity correlation the force
    /// removes within the Green–Kubo window (0 free, 1 held in a well)
    pub share: Estimate,
    /// effective degrees of freedom of the smoothing spline of U
    pub spline_edf: f64,
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
    /// whether the particle is held by its mean force (φ above [`FREE_SHARE`]; without
    /// positions, a vanishing VACF integral)
    pub confined: bool,
    /// the mean force's part (null without positions)
    pub force: Option<ForceTerm>,
    /// the friction γ (1/time), by `gamma_route`
    pub gamma: Estimate,
    /// how γ was obtained
    pub gamma_route: Route,
    /// Green–Kubo's γ = kT/(m D) (high by 1/(1 − φ) in a well)
    pub gamma_green_kubo: Estimate,
    /// the kernel's γ (its fit, else the memoryless γ of its spike), with a force term or when
    /// confined
    pub gamma_kernel: Option<Estimate>,
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

/// Without positions, a Green–Kubo γ is passed on to a scenario only when ∫C/∫|C| over the
/// window is at least this: in a well of curvature ω² the VACF carries a negative tail of area
/// ≈ D·ω²W/γ inside the window W ≈ 8/γ, so the integral is low by ≈ 8ω²/γ² and the ratio is
/// ≈ (1 − x)/(1 + x) with x = 8ω²/γ² (derived here for the overdamped harmonic VACF); 0.8 keeps
/// x, the bias of γ, near 10%.
pub const SCENARIO_RATIO: f64 = 0.8;
/// A kernel γ is passed on only when its standard error is at most this share of it (γ known to
/// about ±40% at 95%).
pub const SCENARIO_GAMMA_REL_SE: f64 = 0.2;
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
    /// The rule: γ needs a 95% interval above zero and, by its route: Green–Kubo, with the
    /// observed force its share φ ≤ [`FREE_SHARE`] (the route's own condition), without positions
    /// ∫C/∫|C| ≥ [`SCENARIO_RATIO`]; the kernel routes, the observed force in the inversion and a
    /// standard error at most [`SCENARIO_GAMMA_REL_SE`] of γ. τ only when that γ is, the
    /// exponential kernel fit is resolved, fails on at most a tenth of the resamples, its interval
    /// lies above zero and its standard error is at most [`SCENARIO_TAU_REL_SE`] of it.
    pub fn for_scenario(&self) -> ScenarioFriction {
        let mut left_out = Vec::new();
        let g = &self.gamma;
        let kernel = self.gamma_route != Route::GreenKubo;
        let friction = if !(g.value > 0.0 && g.ci95[0] > 0.0) {
            left_out.push(format!(
                "the friction's 95% interval [{:e}, {:e}] reaches zero",
                g.ci95[0], g.ci95[1]
            ));
            None
        } else if kernel && !self.kernel.force_term {
            left_out.push(format!(
                "the VACF integral vanishes (∫C/∫|C| = {:.3}) and no positions gave the well's force: the kernel's γ is not the friction",
                self.integral_ratio
            ));
            None
        } else if kernel && g.se > SCENARIO_GAMMA_REL_SE * g.value {
            left_out.push(format!(
                "the kernel's γ = {:.4e} ± {:.4e} is not well determined (se above {SCENARIO_GAMMA_REL_SE} of it)",
                g.value, g.se
            ));
            None
        } else if !kernel && self.force.is_none() && self.integral_ratio < SCENARIO_RATIO {
            left_out.push(format!(
                "∫C/∫|C| = {:.3} is below {SCENARIO_RATIO} and no positions gave the well's force: the well's pull may cut the Green–Kubo integral, so γ = {:.4e} may be too high",
                self.integral_ratio, g.value
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

/// The mean force of the observed free energy: U′(x) of the weighted smoothing spline through
/// the histogram's U(x) = −ln p(x), weights 1/σ_U² (module comment: "Force term").
#[derive(Debug, Clone, PartialEq)]
pub struct MeanForce {
    /// knots (bin centres with a σ_U)
    x: Vec<f64>,
    /// fitted U at the knots (kT)
    u: Vec<f64>,
    /// second derivatives at the knots (natural ends)
    m2: Vec<f64>,
    /// effective degrees of freedom of the fit
    edf: f64,
}

impl MeanForce {
    /// The spline through rows (x, U, σ_U), x increasing; rows with a σ that is not positive
    /// and finite are left out. None with fewer than 4 rows left.
    pub fn from_rows(x: &[f64], u: &[f64], sigma: &[f64]) -> Option<Self> {
        let keep: Vec<usize> = (0..x.len())
            .filter(|&i| sigma[i].is_finite() && sigma[i] > 0.0 && u[i].is_finite())
            .collect();
        if keep.len() < 4 {
            return None;
        }
        let pick = |v: &[f64]| keep.iter().map(|&i| v[i]).collect::<Vec<f64>>();
        let (x, u, sigma) = (pick(x), pick(u), pick(sigma));
        let fit = smooth::fit(
            &x,
            &u,
            &sigma,
            smooth::Rule::Risk {
                correlation_length: 0.0,
            },
        );
        Some(Self {
            x,
            u: fit.values,
            m2: fit.curvatures,
            edf: fit.edf,
        })
    }

    /// From the observed free energy (the bins with a σ_U, as the written profile).
    pub fn from_free_energy(fe: &FreeEnergy) -> Option<Self> {
        let rows: Vec<(f64, f64, f64)> = fe
            .bins
            .iter()
            .filter_map(|b| b.sigma_u.map(|s| (b.x, b.u, s)))
            .collect();
        let col = |f: fn(&(f64, f64, f64)) -> f64| rows.iter().map(f).collect::<Vec<f64>>();
        Self::from_rows(&col(|r| r.0), &col(|r| r.1), &col(|r| r.2))
    }

    /// U′(x) in kT per length: the spline's slope, continued linearly beyond the end knots
    /// (natural ends: U″ = 0 there).
    pub fn derivative(&self, x: f64) -> f64 {
        let n = self.x.len();
        let i = self.x.partition_point(|&k| k <= x).clamp(1, n - 1) - 1;
        let (x0, x1) = (self.x[i], self.x[i + 1]);
        let h = x1 - x0;
        let (m0, m1) = (self.m2[i], self.m2[i + 1]);
        let slope = (self.u[i + 1] - self.u[i]) / h - (m1 - m0) * h / 6.0;
        let (a, b) = ((x1 - x).clamp(0.0, h), (x - x0).clamp(0.0, h));
        slope - m0 * a * a / (2.0 * h) + m1 * b * b / (2.0 * h)
    }

    /// The effective degrees of freedom of the spline (2: a straight line).
    pub fn edf(&self) -> f64 {
        self.edf
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
/// count; with a force series f_t = U′(x_t) beside the velocities, also `fsums[b][k]` =
/// Σ v_t f_{t+k} and `fneg[b]` = Σ v_{t+1} f_t (lag −1, for the central difference at 0).
struct Blocks<'a> {
    blocks: Vec<&'a [f64]>,
    forces: Vec<&'a [f64]>,
    sums: Vec<Vec<f64>>,
    fsums: Vec<Vec<f64>>,
    fneg: Vec<f64>,
    pairs: Vec<Vec<f64>>,
}

/// Cuts every trajectory into consecutive blocks of `len` samples (the last one of each takes
/// the rest).
fn cut<'a>(trajs: &[&'a [f64]], len: usize) -> Vec<&'a [f64]> {
    let mut blocks = Vec::new();
    for t in trajs {
        let nb = (t.len() / len).max(1);
        for b in 0..nb {
            let end = if b + 1 == nb { t.len() } else { (b + 1) * len };
            blocks.push(&t[b * len..end]);
        }
    }
    blocks
}

impl<'a> Blocks<'a> {
    fn new(trajs: &[&'a [f64]], forces: Option<&[&'a [f64]]>, len: usize) -> Self {
        let blocks = cut(trajs, len);
        let forces = forces.map_or_else(Vec::new, |f| cut(f, len));
        let n = blocks.len();
        let fneg = forces
            .iter()
            .zip(&blocks)
            .map(|(f, v)| dot(&f[..f.len().saturating_sub(1)], &v[1.min(v.len())..]))
            .collect();
        Self {
            blocks,
            forces,
            sums: vec![Vec::new(); n],
            fsums: vec![Vec::new(); n],
            fneg,
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
            if let Some(f) = self.forces.get(b) {
                let fb = if v.len() > k {
                    dot(&v[..v.len() - k], &f[k..])
                } else {
                    0.0
                };
                self.fsums[b].push(fb);
            }
            self.sums[b].push(sb);
            self.pairs[b].push(pb);
            s += sb;
            p += pb;
        }
        if p > 0.0 { s / p } else { 0.0 }
    }

    /// The pooled lag sums under block weights `w`: C(k) and, with forces, G(k) = ⟨v_t f_{t+k}⟩
    /// for k < lags, G at lag −1 first (so G has lags + 1 entries, lag j at index j + 1).
    fn correlations(&self, w: &[f64], lags: usize) -> (Vec<f64>, Vec<f64>) {
        let mut c = Vec::with_capacity(lags);
        let mut g = Vec::new();
        if !self.forces.is_empty() {
            let (mut s, mut p) = (0.0, 0.0);
            for (b, &wb) in w.iter().enumerate() {
                s += wb * self.fneg[b];
                p += wb * self.pairs[b].get(1).copied().unwrap_or(0.0);
            }
            g.push(if p > 0.0 { s / p } else { 0.0 });
        }
        for k in 0..lags {
            let (mut s, mut sf, mut p) = (0.0, 0.0, 0.0);
            for (b, &wb) in w.iter().enumerate() {
                s += wb * self.sums[b][k];
                p += wb * self.pairs[b][k];
                if let Some(f) = self.fsums[b].get(k) {
                    sf += wb * f;
                }
            }
            let norm = |x: f64| if p > 0.0 { x / p } else { 0.0 };
            c.push(norm(s));
            if !self.forces.is_empty() {
                g.push(norm(sf));
            }
        }
        (c, g)
    }
}

/// Trapezoid ∫₀^{WΔt} C over lags 0..=w.
fn trapezoid(c: &[f64], w: usize, dt: f64) -> f64 {
    dt * (0.5 * c[0] + c[1..w].iter().sum::<f64>() + 0.5 * c[w])
}

/// The memory kernel K(nΔt), n < `lags`, from the VACF `c` (needs `lags + 1` values) by the
/// second-kind Volterra inversion of the module comment, with the force term `force[n]` =
/// d/dt ⟨U′(x(t)) v(0)⟩/m at t = nΔt (missing entries: 0, a free particle).
pub fn volterra_kernel(c: &[f64], dt: f64, force: &[f64], lags: usize) -> Vec<f64> {
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
        let f = force.get(n).copied().unwrap_or(0.0);
        k.push((-d2 - f - conv) / c[0]);
    }
    k
}

/// The force term of the inversion from G (lag −1 first, see [`Blocks::correlations`]) and the
/// mass: d/dt G(t)/m by central differences at lags 0..lags.
fn force_term(g: &[f64], m: f64, dt: f64, lags: usize) -> Vec<f64> {
    if g.is_empty() {
        return Vec::new();
    }
    (0..lags.min(g.len() - 2))
        .map(|n| (g[n + 2] - g[n]) / (2.0 * dt * m))
        .collect()
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

/// Friction and memory from velocity trajectories sampled every `dt`, without positions: the
/// particle is taken as free (a confined one is warned about, its kernel is not the friction).
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
    analyse(trajs, None, dt, opts, Origin::Given)
}

/// U′(x) along each trajectory, with the observed force.
fn forces(f: &MeanForce, xs: &[&[f64]]) -> Vec<Vec<f64>> {
    xs.iter()
        .map(|x| x.iter().map(|&v| f.derivative(v)).collect())
        .collect()
}

/// Friction and memory from velocity trajectories `vs` with their positions `xs` (same lengths),
/// sampled every `dt`; with `opts.force` the mean force enters the kernel inversion.
///
/// # Errors
/// As [`from_velocities`]; also positions of another length than their velocities.
pub fn from_velocities_and_positions(
    vs: &[&[f64]],
    xs: &[&[f64]],
    dt: f64,
    opts: &Options,
) -> Result<Friction, VelocityError> {
    check(vs, dt, opts)?;
    check(xs, dt, opts)?;
    if let Some(trajectory) =
        (0..vs.len()).find(|&i| xs.get(i).map(|x| x.len()) != Some(vs[i].len()))
    {
        return Err(VelocityError::Lengths { trajectory });
    }
    let f = opts.force.as_ref().map(|f| forces(f, xs));
    let refs: Option<Vec<&[f64]>> = f.as_ref().map(|f| f.iter().map(Vec::as_slice).collect());
    analyse(vs, refs.as_deref(), dt, opts, Origin::Given)
}

/// Friction and memory from position trajectories sampled every `dt`, through central-difference
/// velocities (see the module comment for their error); with `opts.force` the mean force at the
/// centre sample enters the kernel inversion.
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
    let centres: Vec<&[f64]> = trajs
        .iter()
        .map(|x| {
            if x.len() > 2 {
                &x[1..x.len() - 1]
            } else {
                &x[..0]
            }
        })
        .collect();
    let f = opts.force.as_ref().map(|f| forces(f, &centres));
    let frefs: Option<Vec<&[f64]>> = f.as_ref().map(|f| f.iter().map(Vec::as_slice).collect());
    analyse(&refs, frefs.as_deref(), dt, opts, Origin::CentralDifference)
}

/// The quantities of one set of correlations: ⟨v²⟩, m, D, ∫|C|, the force share φ (NaN without
/// a force) and the kernel.
struct Derived {
    v2: f64,
    mass: f64,
    d: f64,
    abs_int: f64,
    share: f64,
    kernel: Vec<f64>,
}

/// The memoryless friction whose spike has the inverted area `a`: (1 − e^{−γΔt})/Δt = a
/// (module comment), NaN when aΔt ≥ 1.
fn memoryless_gamma(a: f64, dt: f64) -> f64 {
    if a * dt < 1.0 {
        -(-a * dt).ln_1p() / dt
    } else {
        f64::NAN
    }
}

#[allow(clippy::too_many_lines)]
fn analyse(
    trajs: &[&[f64]],
    forces: Option<&[&[f64]]>,
    dt: f64,
    opts: &Options,
    origin: Origin,
) -> Result<Friction, VelocityError> {
    let samples: usize = trajs.iter().map(|t| t.len()).sum();
    let needed = BLOCKS * MIN_BLOCK;
    if samples < needed {
        return Err(VelocityError::TooShort { samples, needed });
    }
    let mut warnings = Vec::new();
    let block_len = samples / BLOCKS;
    let mut blocks = Blocks::new(trajs, forces, block_len);
    let c0 = blocks.push_lag();
    if c0 <= 0.0 {
        return Err(VelocityError::NoVariance);
    }
    // the window on |ρ|, computing lags as it goes
    let max_lag = (block_len / 4).clamp(2, MAX_LAGS);
    let mut tau_abs = 0.5;
    let mut window = None;
    for k in 1..=max_lag {
        let ck = blocks.push_lag() / c0;
        tau_abs += ck.abs();
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
    let has_force = forces.is_some();

    let given_mass = opts.mass;
    let derive = |c: &[f64], g: &[f64]| {
        let v2 = c[0];
        let mass = given_mass.unwrap_or(1.0 / v2);
        let d = trapezoid(c, w, dt);
        let abs_int =
            dt * (0.5 * c[0] + c[1..w].iter().map(|v| v.abs()).sum::<f64>() + 0.5 * c[w].abs());
        // φ = ∫₀^W G/m dt / C(0) (G at lag j is g[j + 1])
        let share = if g.is_empty() {
            f64::NAN
        } else {
            trapezoid(&g[1..], w, dt) / (mass * v2)
        };
        let force = force_term(g, mass, dt, klags);
        Derived {
            v2,
            mass,
            d,
            abs_int,
            share,
            kernel: volterra_kernel(c, dt, &force, klags),
        }
    };
    let all = vec![1.0; nb];
    let (c, g) = blocks.correlations(&all, w + 2);
    let main = derive(&c, &g);
    let (v2, mass, d) = (main.v2, main.mass, main.d);
    let integral_ratio = d / main.abs_int;
    let kern = main.kernel.clone();

    // bootstrap weights, drawn before anything depends on the data's outcome
    let mut rng = seed::stream(seed::derive(opts.seed, seed::VELOCITY_BOOTSTRAP), 0);
    let draws: Vec<Derived> = (0..opts.resamples)
        .map(|_| {
            let mut wb = vec![0.0; nb];
            for _ in 0..nb {
                wb[rng.random_range(0..nb)] += 1.0;
            }
            wb
        })
        .collect::<Vec<_>>()
        .iter()
        .map(|wb| {
            let (cr, gr) = blocks.correlations(wb, w + 2);
            derive(&cr, &gr)
        })
        .collect();
    let column = |f: &dyn Fn(&Derived) -> f64| draws.iter().map(f).collect::<Vec<f64>>();
    let d_est = estimate(d, &mut column(&|r| r.d));
    let force_share = has_force.then(|| estimate(main.share, &mut column(&|r| r.share)));
    let confined = match &force_share {
        Some(phi) => phi.value > FREE_SHARE || d_est.ci95[0] <= 0.0,
        None => integral_ratio < CONFINED_RATIO || d_est.ci95[0] <= 0.0,
    };
    if confined && !has_force {
        warnings.push(
            "the particle looks confined but no positions were given: the inverted kernel \
             includes the well's force and is not the friction"
                .into(),
        );
    }

    let k_se: Vec<f64> = (0..klags)
        .map(|n| mean_sd(&column(&|r| r.kernel[n])).1)
        .collect();
    // resolved lags from 1 (K(0) carries an O(Δt) error and, without memory, the spike)
    let points = (1..klags)
        .take_while(|&n| kern[n] > RESOLVED_SE * k_se[n])
        .count();
    let fit = if points >= 3 {
        fit_kernel(&kern, &k_se, dt, points).map(|(g, tau)| {
            let mut gs = Vec::new();
            let mut ts = Vec::new();
            for r in &draws {
                if let Some((gr, tr)) = fit_kernel(&r.kernel, &k_se, dt, points) {
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
    let resolved_area = estimate(area(&kern), &mut column(&|r| area(&r.kernel)));
    let spike = estimate(
        memoryless_gamma(area(&kern), dt),
        &mut column(&|r| memoryless_gamma(area(&r.kernel), dt))
            .into_iter()
            .filter(|v| v.is_finite())
            .collect::<Vec<_>>(),
    );
    let gamma_gk = estimate(1.0 / (mass * d), &mut column(&|r| 1.0 / (r.mass * r.d)));
    let gamma_kernel = (confined || has_force).then_some(match &fit {
        Some(f) => (f.gamma, Route::KernelFit),
        None => (spike, Route::KernelArea),
    });
    let (gamma, gamma_route) = match (confined, gamma_kernel) {
        (true, Some(k)) => {
            warnings.push(match &force_share {
                Some(phi) => format!(
                    "the mean force takes φ = {:.3} of the velocity correlation within the \
                     window (more than {FREE_SHARE}): Green–Kubo's γ = {:.4e} is high by about \
                     1/(1 − φ); γ comes from the memory kernel with the observed force",
                    phi.value, gamma_gk.value
                ),
                None => format!(
                    "the VACF integral vanishes (∫C/∫|C| = {integral_ratio:.3}, D interval \
                     [{:.3e}, {:.3e}]): the particle is confined, Green–Kubo gives no friction; \
                     γ comes from the memory kernel",
                    d_est.ci95[0], d_est.ci95[1]
                ),
            });
            k
        }
        _ => (gamma_gk, Route::GreenKubo),
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
    let v2_est = estimate(v2, &mut column(&|r| r.v2));
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
        None => estimate(mass, &mut column(&|r| r.mass)),
    };
    let force = force_share.map(|share| ForceTerm {
        share,
        spline_edf: opts.force.as_ref().map_or(f64::NAN, MeanForce::edf),
        rule: format!(
            "U′(x) of the weighted smoothing spline through the observed U = −ln p(x) (weights \
             1/σ_U², smoothing by the unbiased-risk rule), correlated as ⟨U′(x(t)) v(0)⟩ and \
             differentiated by central differences; φ = ∫₀^W ⟨U′(x(t)) v(0)⟩ dt/(m⟨v²⟩), \
             Green–Kubo is used while φ ≤ {FREE_SHARE}"
        ),
    });
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
        force,
        gamma,
        gamma_route,
        gamma_green_kubo: gamma_gk,
        gamma_kernel: gamma_kernel.map(|k| k.0),
        kernel: Kernel {
            points: (0..klags)
                .map(|n| [n as f64 * dt, kern[n], k_se[n]])
                .collect(),
            force_term: has_force,
            fit,
            resolved_area,
            memoryless_gamma: spike,
            rule: format!(
                "second-kind Volterra inversion (Berne & Harp 1970) with the observed mean force, \
                 trapezoid; exponential fit by weighted least squares on ln K over the lags from \
                 Δt on above {RESOLVED_SE} standard errors; without a resolved lag, the memoryless \
                 γ = −ln(1 − AΔt)/Δt of the spike's area A"
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
        let k = volterra_kernel(&c, dt, &[], 40);
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
            let k = volterra_kernel(&c, dt, &[], 500);
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
