//! Profile uncertainty: how the standard errors σ_U of a tabulated profile carry into E_b and every
//! rate, by re-analysing the profile under random perturbations (parametric bootstrap).
//!
//! Perturbation model. Draw k perturbs the knot values U_i by
//! δU_i = σ_i · Σ_j w_ij ξ_j / sqrt(Σ_j w_ij²), ξ_j iid N(0, 1), w_ij = exp(−(x_i − x_j)²/(2ℓ²)):
//! white noise smoothed over a correlation length ℓ and normalised so that every knot keeps its own
//! marginal standard deviation σ_i exactly (Var δU_i = σ_i² Σ_j w_ij²/Σ_j w_ij² = σ_i²). For ℓ
//! well above the spacing the correlation between knots a distance r apart is ≈ exp(−r²/(4ℓ²)).
//! Draw k takes its ξ from `seed::stream(seed, k)`; draws run in parallel (rayon) and are
//! collected in draw order, so a report depends on the seed only, never on the thread count. Default
//! ℓ = the median knot spacing (neighbouring rows of a free-energy profile are correlated because
//! the same samples feed them); ℓ = 0 makes the knots independent. The kernel is cut at
//! |x_i − x_j| < 6ℓ: there w² = e^(−36) ≈ 2e−16, below the rounding of Σ w² ≥ 1 (the diagonal
//! term), so the cut changes nothing at double precision while keeping a 10⁵-knot table at
//! O(n · ℓ/h) work per draw (h the knot spacing; on a uniform grid the weights are tabulated by
//! |i − j| once). A user-chosen ℓ of many spacings on a huge table costs accordingly.
//!
//! Per-draw analysis. The perturbed table keeps x, σ_U and the D column; the landscape
//! ([`Landscape::analyse`]) and the rates ([`theory::rates_for`]) are recomputed with these rules,
//! so that spurious shallow stationary points made by the noise cannot change what is measured:
//! the absorbing point stays at the unperturbed target; the reactant is the lowest minimum of the
//! perturbed profile inside the unperturbed reactant basin (between the unperturbed maxima, or
//! domain ends, that enclose the unperturbed reactant minimum); the barrier is then the highest
//! maximum between reactant and target (the landscape's rule for a given target). The rate
//! quadratures split at the draw's reactant, barrier and product, not at every spurious stationary
//! point (same integrals, far fewer panels). A draw whose
//! analysis fails (no minimum in the basin, no barrier, a wall below the well) is counted and
//! left out; more than 1% failed draws gives a warning. The central values are those of
//! [`theory::analyse`] on the unperturbed profile (what the rate report shows); with σ_U = 0 every
//! draw repeats them: exactly when reactant, barrier and product are the only stationary points
//! between the wall and the target, else to the quadrature tolerance (the central computation
//! also splits at the others).
//!
//! Diffusion noise. A table with D and sigma_D columns has D perturbed too, in ln D:
//! D_i → D_i exp(s_i ζ_i), s_i = σ_D,i/D_i (the relative error, the standard deviation of ln D to
//! first order), ζ smoothed over ℓ exactly like ξ but from its own streams
//! (`seed::stream(seed::derive(seed, seed::DIFFUSION_DRAWS), k)`), so the σ_U draws are the same
//! with or without a sigma_D column and the two noises are independent. Multiplicative noise keeps
//! D positive and leaves D's median at the table value. The intervals come from draws with both
//! perturbed; two more sets of draws, with σ_U alone and σ_D alone, give each source's var(ln k)
//! per rate and say which dominates (`diffusion_noise`).
//!
//! Intervals. The draws perturb the *measured* table, so they scatter about the estimate θ̂ the way
//! θ̂ scatters about the true value θ, shift included: noise moves the estimates of a nonlinear
//! analysis by b (e^{δU} averages to e^{σ²/2} in the MFPT integrals, the maximum of a noisy profile
//! sits high, spline curvatures grow), so θ̂ ≈ θ + b and the draws centre on θ̂ + b ≈ θ + 2b. The
//! plain percentile interval [q(α/2), q(1 − α/2)] of the draws then misses θ on one side. The report
//! gives the basic (reflected) bootstrap interval [2θ̂ − q(1 − α/2), 2θ̂ − q(α/2)] (Davison &
//! Hinkley, Bootstrap Methods and their Application, 1997, eq. (5.6)), centred on θ̂ − b ≈ θ: it
//! removes the shift to first order. Rates are reflected in ln k (positive, and the noise shifts
//! them by a factor: the limits are k̂²/q), E_b in kT. `median` is the 50% point of the same
//! construction,
//! the bias-corrected estimate 2θ̂ − median of the draws; the draws' own median and 2.5–97.5%
//! spread are kept as `draws_median` and `draws_ci95`. Chosen by measurement over the
//! bias-corrected percentile interval (Efron, Can. J. Stat. 9, 139 (1981); Efron & Tibshirani, An
//! Introduction to the Bootstrap, 1993, ch. 14: limits at the draws' percentiles
//! Φ(2z₀ ± z_{1−α/2}), z₀ = Φ⁻¹(fraction of draws below θ̂)). In the coverage experiment of
//! tests/uncertainty_coverage.rs (200 noisy tables per correlation length, 40 draws each) the 95%
//! interval of 1/MFPT held the true rate in 97.0% and 95.5% of the tables (ℓ = 0.15 and 0.03 of a
//! 4-unit table) for the basic interval, 93.5% and 87.0% for the bias-corrected one, whose z₀ from
//! 40 draws is noisy and whose limits fall beyond the extreme draws when |z₀| is large, and 91.0%
//! and 82.0% for the percentile interval with the earlier percentile rule (94.5%, 89.0% with the
//! rule below). With 200 draws both corrections covered 96.5–97% at ℓ = 0.03.
//!
//! Percentiles interpolate linearly between order statistics at rank (M + 1)p of the M sorted draws,
//! clamped to the sample (Hyndman & Fan, Am. Stat. 50, 361 (1996), definition 6; Davison & Hinkley,
//! Sec. 5.2, take the (R + 1)α-th of R ordered values). If θ̂ − θ has the law of θ* − θ̂ (the
//! bootstrap's premise), the reflected truth 2θ̂ − θ is one more of M + 1 independent values with
//! the draws' law, whose rank among them is uniform on 1..M + 1; so ranks (M + 1)α/2 and
//! (M + 1)(1 − α/2) of the draws enclose it with probability 1 − α for any M. The rule (M − 1)p used before gives ranks 1.975 and 39.025
//! at M = 40, which enclose it with probability 37.05/41 = 90.4%. 68% = levels 0.16 and 0.84,
//! 95% = 0.025 and 0.975. N = 400 draws suffice: the 2.5% percentile then rests on about 10 draws
//! in the tail, and its standard error sqrt(p(1−p)/N)/φ(1.96) ≈ 0.13 standard deviations of ln k
//! (a normal sample) moves the 95% endpoints by about 7% of the half-width, small next to the
//! uncertainty of σ_U itself.
//!
//! Barrier versus prefactor. With y = ln k, b = −E_b and r = ln k + E_b (the logarithm of the
//! prefactor, which carries the curvatures and the shape of the profile),
//! var(y) = var(b) + var(r) + 2 cov(b, r). barrier_share = var(E_b)/var(ln k) and
//! prefactor_share = var(ln k + E_b)/var(ln k) say which part of the profile's error dominates;
//! covariance_share = 2 cov/var(ln k) completes the sum to 1 (it is negative when a higher barrier
//! comes with a larger prefactor, for instance a sharper barrier top). Computed for 1/MFPT (exact,
//! always present) and for Kramers when it applies. The shares are not confined to [0, 1]: for
//! short ℓ, E_b read at the extreme knots of a noisy profile varies more than 1/MFPT, which
//! averages the noise over the thermal windows, and then barrier_share > 1 with a large negative
//! covariance share.
//!
//! A central value outside the central 95% of its draws is reported as a warning: the noise then
//! shifts that estimate by more than its spread (spline curvatures, the maximum and minimum of a
//! noisy profile), and a first-order correction of the shift is not to be trusted.

use crate::landscape::{Kind, Landscape};
use crate::potential::AnyPotential;
use crate::potential::{Diffusion, Potential, Spline, Table};
use crate::seed::{self, stream};
use crate::system::System;
use crate::theory::catalogue::CATALOGUE;
use crate::theory::{self, RateKey, Rates, TheoryError};
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde::Serialize;
use thiserror::Error;

/// Default number of draws (see the module doc for why 400 suffice).
pub const DEFAULT_DRAWS: usize = 400;
/// Fewest draws accepted: below 39 the rank (M + 1)·0.025 of the 2.5% percentile lies outside the
/// sample.
pub const MIN_DRAWS: usize = 40;
/// The interval construction, as the report names it.
pub const INTERVAL_METHOD: &str = "basic bootstrap: 2*central - percentiles of the draws (ln k for rates), percentile rank (M+1)p";
/// The kernel is cut at this many correlation lengths (w² = e^(−36) there).
pub const KERNEL_CUT: f64 = 6.0;
/// A draw whose MFPT quadrature changed by more than this (relative) at its last panel doubling is
/// counted as unconverged (the threshold at which `theory::rates_for` warns).
const MFPT_CHANGE_WARN: f64 = 1e-8;
/// More failed draws than this fraction gives a warning.
pub const FAILED_WARN_FRACTION: f64 = 0.01;

/// Settings of the propagation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UncertaintyOptions {
    /// number of perturbed profiles
    pub draws: usize,
    /// ℓ in the scenario's length unit; `None` = the median knot spacing, 0 = independent knots
    pub correlation_length: Option<f64>,
    /// master seed; draw k uses `seed::stream(seed, k)`
    pub seed: u64,
}

impl Default for UncertaintyOptions {
    fn default() -> Self {
        Self {
            draws: DEFAULT_DRAWS,
            correlation_length: None,
            seed: 1,
        }
    }
}

/// Problems; [`UncertaintyError::key`] names the scenario key to look at.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum UncertaintyError {
    /// The unperturbed profile could not be analysed.
    #[error(transparent)]
    Theory(#[from] TheoryError),
    /// Too few draws.
    #[error("{draws} draws: at least {MIN_DRAWS} are needed for a 95% interval")]
    TooFewDraws {
        /// as given
        draws: usize,
    },
    /// A negative or non-finite correlation length.
    #[error("correlation length {value}: must be a finite number >= 0")]
    BadCorrelationLength {
        /// as given
        value: f64,
    },
    /// Every draw failed.
    #[error(
        "all {draws} perturbed profiles failed the landscape analysis: sigma_U is too large for the profile's wells and barrier to be identified"
    )]
    AllFailed {
        /// number of draws
        draws: usize,
    },
}

impl UncertaintyError {
    /// The scenario key a user should look at.
    pub fn key(&self) -> &'static str {
        match self {
            Self::Theory(e) => e.key(),
            Self::TooFewDraws { .. } => "uncertainty.draws",
            Self::BadCorrelationLength { .. } => "uncertainty.correlation_length",
            Self::AllFailed { .. } => "potential.table",
        }
    }
}

/// A central value with its spread over the draws.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Interval {
    /// JSON key ("barrier" for E_b, else the rate's key)
    pub key: &'static str,
    /// the unperturbed value
    pub central: f64,
    /// the bias-corrected estimate 2·central − (median of the draws), in ln k for rates: the 50%
    /// point of the reflected construction
    pub median: f64,
    /// 68% basic bootstrap interval: 2·central − the draws' 84% and 16% percentiles
    pub ci68: [f64; 2],
    /// 95% basic bootstrap interval: 2·central − the draws' 97.5% and 2.5% percentiles
    pub ci95: [f64; 2],
    /// median of the draws (what `median` was before the intervals were reflected)
    pub draws_median: f64,
    /// 2.5% and 97.5% percentiles of the draws: their spread, not a confidence interval
    pub draws_ci95: [f64; 2],
    /// draws that gave this value (successful draws where the formula applies)
    pub samples: usize,
}

/// The variance decomposition of ln k into barrier and prefactor parts (see the module doc).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Decomposition {
    /// the rate's key (the formulas whose catalogue entry has `decompose`: 1/MFPT, Kramers)
    pub key: &'static str,
    /// var(ln k) over the draws
    pub var_ln_k: f64,
    /// var(E_b)/var(ln k); `None` when var(ln k) = 0
    pub barrier_share: Option<f64>,
    /// var(ln k + E_b)/var(ln k)
    pub prefactor_share: Option<f64>,
    /// 2 cov(−E_b, ln k + E_b)/var(ln k)
    pub covariance_share: Option<f64>,
}

/// Everything the propagation reports (internal units: energies in kT, rates per scenario time
/// unit, lengths in the scenario's length unit).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct UncertaintyReport {
    /// the perturbation model in words
    pub model: String,
    /// draws made
    pub draws: usize,
    /// draws whose analysis failed (left out)
    pub failed: usize,
    /// ℓ used
    pub correlation_length: f64,
    /// the seed used
    pub seed: u64,
    /// how `median`, `ci68` and `ci95` are built ([`INTERVAL_METHOD`])
    pub interval_method: &'static str,
    /// E_b (kT)
    #[serde(rename = "barrier_height_kT")]
    pub barrier: Interval,
    /// one per rate that applies
    pub rates: Vec<Interval>,
    /// var(E_b)/var(ln k) for 1/MFPT
    pub barrier_share: Option<f64>,
    /// var(ln k + E_b)/var(ln k) for 1/MFPT
    pub prefactor_share: Option<f64>,
    /// the decomposition for 1/MFPT and, where it applies, Kramers
    pub decompositions: Vec<Decomposition>,
    /// with a sigma_D column: how much of var(ln k) comes from σ_D and how much from σ_U
    #[serde(skip_serializing_if = "Option::is_none")]
    pub diffusion_noise: Option<DiffusionNoise>,
    /// what a user should know
    pub warnings: Vec<String>,
}

/// The two sources of a rate's spread when the table carries σ_D beside (or instead of) σ_U.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct DiffusionNoise {
    /// the perturbation of D in words
    pub model: String,
    /// per rate: var(ln k) from σ_U alone and from σ_D alone, and the larger source
    pub rates: Vec<SourceShare>,
}

/// One rate's variance by source.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct SourceShare {
    /// the rate's key
    pub key: &'static str,
    /// var(ln k) over draws perturbing U only (0 without a sigma_U column)
    pub var_ln_k_profile: f64,
    /// var(ln k) over draws perturbing D only
    pub var_ln_k_diffusion: f64,
    /// "profile" or "diffusion", whichever variance is larger
    pub dominant: &'static str,
}

/// One draw's outcome.
#[derive(Debug, Clone, Copy)]
struct Draw {
    eb: f64,
    rates: Rates,
    /// the MFPT quadrature met its tolerance (the threshold `theory::rates_for` warns at)
    mfpt_converged: bool,
}

/// Median knot spacing.
/// Percentile of sorted data: linear interpolation at rank (M + 1)p, clamped to the sample
/// (Hyndman & Fan, def. 6).
fn quantile(sorted: &[f64], p: f64) -> f64 {
    let m = sorted.len();
    let pos = ((m + 1) as f64 * p - 1.0).clamp(0.0, (m - 1) as f64);
    let i = pos.floor() as usize;
    let f = pos - i as f64;
    match sorted.get(i + 1) {
        Some(&next) if f > 0.0 => sorted[i] + f * (next - sorted[i]),
        _ => sorted[i],
    }
}

/// The smoothing kernel: for each knot i the window [start, end) of knots within the cut and
/// 1/sqrt(Σ_j w_ij²); on a uniform grid the weights depend on |i − j| only and are tabulated once.
struct Kernel {
    ell: f64,
    rows: Vec<(usize, usize, f64)>,
    /// w by |i − j| (uniform grids)
    by_offset: Option<Vec<f64>>,
}

impl Kernel {
    fn new(x: &[f64], ell: f64) -> Self {
        let n = x.len();
        // below 1/40 of the closest spacing a neighbour's weight is e^(−800) = 0 in f64: the
        // knots are independent (and the window search would lose the knot itself to rounding)
        let closest = x
            .windows(2)
            .map(|w| w[1] - w[0])
            .fold(f64::INFINITY, f64::min);
        if ell < closest / 40.0 {
            return Self {
                ell: 0.0,
                rows: (0..n).map(|i| (i, i + 1, 1.0)).collect(),
                by_offset: None,
            };
        }
        let reach = KERNEL_CUT * ell;
        // uniform within 1e-9 spacings (the spline's own test): tabulate w(d·h)
        let h = (x[n - 1] - x[0]) / (n - 1) as f64;
        let uniform = x
            .iter()
            .enumerate()
            .all(|(i, &xi)| (xi - (x[0] + h * i as f64)).abs() <= 1e-9 * h);
        let by_offset = uniform.then(|| {
            // in f64 first: a huge ℓ must not overflow the integer cast
            let dmax_f = (reach / h).ceil() + 1.0;
            let dmax = if dmax_f >= (n - 1) as f64 {
                n - 1
            } else {
                dmax_f as usize
            };
            // (d h/ℓ)² rather than (d h)²/ℓ²: a tiny ℓ must not make 0/0
            (0..=dmax)
                .map(|d| (-0.5 * (d as f64 * h / ell).powi(2)).exp())
                .collect()
        });
        let mut k = Self {
            ell,
            rows: Vec::with_capacity(n),
            by_offset,
        };
        for (i, &xi) in x.iter().enumerate() {
            let start = x.partition_point(|&v| v <= xi - reach);
            let end = x.partition_point(|&v| v < xi + reach);
            let s2: f64 = (start..end).map(|j| k.weight(x, i, j).powi(2)).sum();
            k.rows.push((start, end, 1.0 / s2.sqrt()));
        }
        k
    }

    #[inline]
    fn weight(&self, x: &[f64], i: usize, j: usize) -> f64 {
        match &self.by_offset {
            Some(w) => w[i.abs_diff(j)],
            None => (-0.5 * ((x[i] - x[j]) / self.ell).powi(2)).exp(),
        }
    }
}

/// δU of draw `k` of the module's noise model for knots `x` with standard errors `sigma` and
/// correlation length `ell` (0 = independent knots): what [`propagate`] adds to the knot values.
pub fn profile_noise(x: &[f64], sigma: &[f64], ell: f64, seed: u64, k: u64) -> Vec<f64> {
    perturbation(x, sigma, &Kernel::new(x, ell), seed, k)
}

/// δU for draw `k` (see the module doc).
fn perturbation(x: &[f64], sigma: &[f64], kernel: &Kernel, seed: u64, k: u64) -> Vec<f64> {
    let mut rng = stream(seed, k);
    let xi: Vec<f64> = (0..x.len()).map(|_| rng.sample(StandardNormal)).collect();
    kernel
        .rows
        .iter()
        .enumerate()
        .map(|(i, &(start, end, norm))| {
            let s: f64 = if kernel.ell == 0.0 {
                xi[i]
            } else {
                (start..end).map(|j| kernel.weight(x, i, j) * xi[j]).sum()
            };
            sigma[i] * s * norm
        })
        .collect()
}

/// The unperturbed reactant basin: the unperturbed maxima (or domain ends) around x_a.
fn basin(l: &Landscape, domain: (f64, f64)) -> (f64, f64) {
    let maxima = || l.points.iter().filter(|p| p.kind == Kind::Maximum);
    let left = maxima()
        .filter(|p| p.x < l.reactant)
        .map(|p| p.x)
        .fold(domain.0, f64::max);
    let right = maxima()
        .filter(|p| p.x > l.reactant)
        .map(|p| p.x)
        .fold(domain.1, f64::min);
    (left, right)
}

/// Analyses one (perturbed) table with the per-draw rules; `None` if the analysis fails.
fn analyse_draw(
    table: &Table,
    model: &System,
    diffusion: &Diffusion,
    basin: (f64, f64),
    target: f64,
) -> Option<Draw> {
    let points = crate::landscape::stationary_points(table).ok()?;
    let reactant = points
        .iter()
        .filter(|p| p.kind == Kind::Minimum && p.x > basin.0 && p.x < basin.1)
        .min_by(|a, b| a.u.total_cmp(&b.u))?
        .x;
    let mut l = Landscape::analyse(table, Some(reactant), Some(target), model.mass).ok()?;
    // The rates use the stationary points only as quadrature breakpoints. Noise can add a hundred
    // spurious ones, each a segment whose panels are doubled to the tolerance (10x slower, same
    // integrals to ~1e-11): split at the draw's reactant, barrier and product only. (With σ_U = 0
    // these are the unperturbed ones; the spurious points of a noisy unperturbed table are no
    // features of a draw, and splitting at them too made the draws 2.5x slower at ℓ = 3 spacings.)
    let keep = [Some(l.reactant), Some(l.barrier), l.product];
    l.points.retain(|p| keep.contains(&Some(p.x)));
    let eb = l.barrier_height;
    let t = theory::rates_for(
        table,
        diffusion,
        model.mass,
        model.friction,
        model.memory_time,
        l,
    );
    Some(Draw {
        eb,
        rates: t.rates,
        mfpt_converged: t.mfpt.last_change <= MFPT_CHANGE_WARN,
    })
}

/// The basic bootstrap interval (module doc): the draws' percentiles reflected about the
/// unperturbed value θ̂, level p at 2θ̂ − q(1 − p); in ln k for rates, in kT for E_b.
fn interval(key: &'static str, central: f64, mut v: Vec<f64>, log: bool) -> Interval {
    let fwd = |r: f64| if log { r.ln() } else { r };
    let back = |q: f64| if log { q.exp() } else { q };
    v.iter_mut().for_each(|r| *r = fwd(*r));
    v.sort_by(f64::total_cmp);
    let t = fwd(central);
    let q = |p: f64| quantile(&v, p);
    let reflected = |p: f64| back(2.0 * t - q(1.0 - p));
    Interval {
        key,
        central,
        median: reflected(0.5),
        ci68: [reflected(0.16), reflected(0.84)],
        ci95: [reflected(0.025), reflected(0.975)],
        draws_median: back(q(0.5)),
        draws_ci95: [back(q(0.025)), back(q(0.975))],
        samples: v.len(),
    }
}

/// A central value outside the central 95% of its draws means the noise shifts the estimate by more
/// than its spread (typically spline curvatures, or E_b read at the extremes of a noisy profile).
fn outside(i: &Interval) -> bool {
    i.central < i.draws_ci95[0] || i.central > i.draws_ci95[1]
}

fn mean(v: &[f64]) -> f64 {
    v.iter().sum::<f64>() / v.len() as f64
}

/// Sample covariance (denominator M − 1), computed on values shifted by the first sample so that
/// identical samples give exactly 0 (not the rounding of their mean).
fn covariance(a: &[f64], b: &[f64]) -> f64 {
    let a: Vec<f64> = a.iter().map(|v| v - a[0]).collect();
    let b: Vec<f64> = b.iter().map(|v| v - b[0]).collect();
    let (ma, mb) = (mean(&a), mean(&b));
    let s: f64 = a.iter().zip(&b).map(|(x, y)| (x - ma) * (y - mb)).sum();
    s / (a.len() as f64 - 1.0)
}

fn decompose(key: &'static str, pairs: &[(f64, f64)]) -> Decomposition {
    // y = ln k, b = −E_b, r = y − b
    let b: Vec<f64> = pairs.iter().map(|p| -p.0).collect();
    let y: Vec<f64> = pairs.iter().map(|p| p.1).collect();
    let r: Vec<f64> = y.iter().zip(&b).map(|(y, b)| y - b).collect();
    let vy = covariance(&y, &y);
    let share = |v: f64| (vy > 0.0).then(|| v / vy);
    Decomposition {
        key,
        var_ln_k: vy,
        barrier_share: share(covariance(&b, &b)),
        prefactor_share: share(covariance(&r, &r)),
        covariance_share: share(2.0 * covariance(&b, &r)),
    }
}

/// Propagates the table's σ_U into E_b and every rate.
///
/// Returns `Ok(None)` when the potential is not a table or the table has no σ_U column.
///
/// # Errors
/// Fewer than [`MIN_DRAWS`] draws, a negative or non-finite correlation length, an unperturbed
/// profile that cannot be analysed, or every draw failing.
pub fn propagate(
    model: &System,
    opts: &UncertaintyOptions,
) -> Result<Option<UncertaintyReport>, UncertaintyError> {
    let AnyPotential::Table(table) = &model.potential else {
        return Ok(None);
    };
    // D noise only where the D column is the system's D (a table D column, not a periodic one)
    let d_noise = match (table.d_rows(), table.sigma_d(), &model.diffusion) {
        (Some(d), Some(s), Diffusion::Table(_)) if s.iter().any(|&v| v > 0.0) => Some((d, s)),
        _ => None,
    };
    let no_sigma;
    let sigma = match table.sigma_u() {
        Some(s) => s,
        None if d_noise.is_some() => {
            no_sigma = vec![0.0; table.knot_u().len()];
            &no_sigma
        }
        None => return Ok(None),
    };
    if opts.draws < MIN_DRAWS {
        return Err(UncertaintyError::TooFewDraws { draws: opts.draws });
    }
    let x = table.spline().knots();
    let ell = match opts.correlation_length {
        None => crate::potential::table::median_spacing(x),
        Some(v) if v.is_finite() && v >= 0.0 => v,
        Some(v) => return Err(UncertaintyError::BadCorrelationLength { value: v }),
    };
    let central = theory::analyse(model)?;
    let l0 = &central.landscape;
    let basin = basin(l0, table.domain());
    let target = l0.target;
    let kernel = Kernel::new(x, ell);
    let u0 = table.knot_u();

    let d_seed = seed::derive(opts.seed, seed::DIFFUSION_DRAWS);
    let relative: Option<Vec<f64>> =
        d_noise.map(|(d, s)| s.iter().zip(d).map(|(s, d)| s / d).collect());
    // draws perturbing U (with `with_u`) and D (with `with_d`, when the table has σ_D)
    let run = |with_u: bool, with_d: bool| -> Vec<Option<Draw>> {
        (0..opts.draws as u64)
            .into_par_iter()
            .map(|k| {
                let table_k = if with_u {
                    let du = perturbation(x, sigma, &kernel, opts.seed, k);
                    let u: Vec<f64> = u0.iter().zip(&du).map(|(u, d)| u + d).collect();
                    table.with_knot_u(&u)
                } else {
                    table.clone()
                };
                let diffusion = match (&relative, d_noise) {
                    (Some(rel), Some((d, _))) if with_d => {
                        let z = perturbation(x, rel, &kernel, d_seed, k);
                        let dk: Vec<f64> = d.iter().zip(&z).map(|(d, z)| d * z.exp()).collect();
                        Diffusion::Table(Spline::new(x, &dk))
                    }
                    _ => model.diffusion.clone(),
                };
                analyse_draw(&table_k, model, &diffusion, basin, target)
            })
            .collect()
    };
    let draws = run(true, true);
    let ok: Vec<Draw> = draws.iter().flatten().copied().collect();
    let failed = opts.draws - ok.len();
    if ok.is_empty() {
        return Err(UncertaintyError::AllFailed { draws: opts.draws });
    }
    let mut warnings = Vec::new();
    if failed as f64 > FAILED_WARN_FRACTION * opts.draws as f64 {
        warnings.push(format!(
            "{failed} of {} perturbed profiles ({:.1}%) could not be analysed (no minimum in the reactant basin or no barrier): the intervals describe the rest and understate the uncertainty",
            opts.draws,
            100.0 * failed as f64 / opts.draws as f64
        ));
    }

    let unconverged = ok.iter().filter(|d| !d.mfpt_converged).count();
    if unconverged > 0 {
        warnings.push(format!(
            "the MFPT quadrature did not reach its tolerance for {unconverged} of {} perturbed profiles (a very noisy spline needs more panels than the quadrature allows): their 1/MFPT may be inaccurate",
            ok.len()
        ));
    }
    let barrier = interval(
        "barrier",
        l0.barrier_height,
        ok.iter().map(|d| d.eb).collect(),
        false,
    );
    let mut rates = Vec::new();
    let mut decompositions = Vec::new();
    for f in CATALOGUE {
        let key = f.key.as_str();
        let Some(c) = central.rates[f.key] else {
            continue;
        };
        let pairs: Vec<(f64, f64)> = ok
            .iter()
            .filter_map(|d| {
                d.rates[f.key]
                    .filter(|r| r.is_finite() && *r > 0.0)
                    .map(|r| (d.eb, r.ln()))
            })
            .collect();
        if pairs.is_empty() {
            warnings.push(format!(
                "{key}: no perturbed profile gave this rate, so it has no interval"
            ));
            continue;
        }
        if pairs.len() < ok.len() {
            warnings.push(format!(
                "{key}: {} of {} analysed profiles did not give this rate",
                ok.len() - pairs.len(),
                ok.len()
            ));
        }
        let i = interval(key, c, pairs.iter().map(|p| p.1.exp()).collect(), true);
        rates.push(i);
        if f.decompose && pairs.len() >= 2 {
            decompositions.push(decompose(key, &pairs));
        }
    }
    let biased: Vec<&str> = [&barrier]
        .into_iter()
        .chain(&rates)
        .filter(|i| outside(i))
        .map(|i| i.key)
        .collect();
    if !biased.is_empty() {
        warnings.push(format!(
            "{}: the unperturbed value lies outside the central 95% of the perturbed profiles' values, so noise of this size and correlation length biases it by more than its spread (curvatures and extreme points of a noisy spline); the reflected intervals remove such a shift only to first order: prefer 1/MFPT, which integrates over the profile",
            biased.join(", ")
        ));
    }
    let mfpt_dec = decompositions
        .iter()
        .find(|d| d.key == RateKey::Mfpt.as_str());
    let (barrier_share, prefactor_share) =
        mfpt_dec.map_or((None, None), |d| (d.barrier_share, d.prefactor_share));
    let model_text = format!(
        "dU_i = sigma_i * sum_j w_ij xi_j / sqrt(sum_j w_ij^2), xi_j iid N(0,1), w_ij = exp(-(x_i-x_j)^2/(2 l^2)), l = {ell:.4e}{}; {} draws, seed {}",
        if ell == 0.0 {
            " (independent knots)"
        } else if opts.correlation_length.is_none() {
            " (the median knot spacing)"
        } else {
            ""
        },
        opts.draws,
        opts.seed
    );
    Ok(Some(UncertaintyReport {
        model: model_text,
        draws: opts.draws,
        failed,
        correlation_length: ell,
        seed: opts.seed,
        interval_method: INTERVAL_METHOD,
        barrier,
        rates,
        barrier_share,
        prefactor_share,
        decompositions,
        diffusion_noise: relative.is_some().then(|| DiffusionNoise {
            model: format!(
                "D_i -> D_i exp((sigma_D,i/D_i) zeta_i), zeta smoothed over l like xi, from streams of seed {} mixed with its own salt; {} draws each with U alone and D alone for the split",
                opts.seed, opts.draws
            ),
            rates: source_shares(&central.rates, &run(true, false), &run(false, true), table.sigma_u().is_some()),
        }),
        warnings,
    }))
}

/// var(ln k) per rate over U-only and D-only draws (failed draws and absent rates left out).
fn source_shares(
    central: &Rates,
    u_only: &[Option<Draw>],
    d_only: &[Option<Draw>],
    has_sigma_u: bool,
) -> Vec<SourceShare> {
    let var = |draws: &[Option<Draw>], key: RateKey| {
        let v: Vec<f64> = draws
            .iter()
            .flatten()
            .filter_map(|d| d.rates[key].filter(|r| r.is_finite() && *r > 0.0))
            .map(f64::ln)
            .collect();
        if v.len() < 2 { 0.0 } else { covariance(&v, &v) }
    };
    CATALOGUE
        .iter()
        .filter(|f| central[f.key].is_some())
        .map(|f| {
            let vu = if has_sigma_u { var(u_only, f.key) } else { 0.0 };
            let vd = var(d_only, f.key);
            SourceShare {
                key: f.key.as_str(),
                var_ln_k_profile: vu,
                var_ln_k_diffusion: vd,
                dominant: if vd > vu { "diffusion" } else { "profile" },
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    // Hyndman & Fan, Am. Stat. 50, 361 (1996), definition 6, worked by hand: 1-based rank
    // (M + 1)p, clamped to the sample.
    #[test]
    fn quantile_definition_6() {
        let v = [1.0, 2.0, 4.0, 8.0];
        assert_eq!(quantile(&v, 0.0), 1.0);
        assert_eq!(quantile(&v, 0.1), 1.0); // rank 0.5, clamped
        assert_eq!(quantile(&v, 1.0), 8.0);
        assert_eq!(quantile(&v, 0.5), 3.0); // rank 2.5
        assert_eq!(quantile(&v, 0.3), 1.5); // rank 1.5
        assert_eq!(quantile(&v, 0.7), 6.0); // rank 3.5
    }

    // Reflection (module doc): level p at 2θ̂ − q(1 − p), geometric for rates. Draws 1..=39 in
    // kT (ranks (M + 1)p = 40p, so q(p) = 40p): q(0.025) = 1, q(0.5) = 20, q(0.975) = 39.
    // Worked by hand; exact in binary except the ln/exp round trip (1e-12).
    #[test]
    fn basic_interval_reflects_about_the_central_value() {
        let draws: Vec<f64> = (1..=39).map(f64::from).collect();
        let e = interval("barrier", 25.0, draws.clone(), false);
        assert_eq!(e.ci95, [50.0 - 39.0, 50.0 - 1.0]);
        assert_eq!(e.median, 30.0);
        assert_eq!(e.draws_median, 20.0);
        assert_eq!(e.draws_ci95, [1.0, 39.0]);
        let k = interval(
            "mfpt",
            3f64.exp(),
            draws.iter().map(|d| d.exp()).collect(),
            true,
        );
        let want = [(6.0 - 39.0f64).exp(), (6.0 - 1.0f64).exp()];
        for (g, w) in k.ci95.iter().zip(want) {
            assert!((g / w - 1.0).abs() < 1e-12, "{g} {w}");
        }
        assert!((k.median / (-14.0f64).exp() - 1.0).abs() < 1e-12);
    }

    // The normalisation makes Σ_j (w_ij · norm_i)² = 1, so every knot keeps variance σ_i²
    // (derived in the module doc). Rounding only: 1e-12. The tabulated weights of a uniform grid
    // equal the Gaussian at the knots' distance to rounding of x (1e-9 spacings by construction).
    #[test]
    fn kernel_rows_are_normalised() {
        let ell = 0.037;
        let gauss = |d: f64| (-d * d / (2.0 * ell * ell)).exp();
        let uneven: Vec<f64> = (0..300)
            .map(|i| f64::from(i) * 0.01 + 1e-3 * f64::from(i % 7))
            .collect();
        let even: Vec<f64> = (0..300).map(|i| f64::from(i) * 0.01).collect();
        for (x, uniform) in [(uneven, false), (even, true)] {
            let k = Kernel::new(&x, ell);
            for (i, &(start, end, norm)) in k.rows.iter().enumerate() {
                let s: f64 = (start..end)
                    .map(|j| (k.weight(&x, i, j) * norm).powi(2))
                    .sum();
                assert!((s - 1.0).abs() < 1e-12, "{i}: {s}");
                for j in start..end {
                    assert!((k.weight(&x, i, j) - gauss(x[i] - x[j])).abs() < 1e-12);
                }
                // the cut keeps every knot within 6 ℓ
                assert!(start == 0 || x[i] - x[start - 1] >= KERNEL_CUT * ell);
                assert!(end == x.len() || x[end] - x[i] >= KERNEL_CUT * ell);
            }
            assert_eq!(k.by_offset.is_some(), uniform);
        }
    }

    // Sample variance of δU_i over 4000 draws against σ_i² (the model's marginal). The sample
    // variance of normals has relative standard error sqrt(2/(M−1)) = 2.2%; 4 of them: 9%.
    #[test]
    fn marginal_standard_deviation_is_kept() {
        let x: Vec<f64> = (0..60).map(|i| f64::from(i) * 0.1).collect();
        let sigma: Vec<f64> = (0..60).map(|i| 0.1 + 0.01 * f64::from(i)).collect();
        for ell in [0.0, 0.1, 0.5] {
            let kernel = Kernel::new(&x, ell);
            let m = 4000;
            let mut s2 = [0.0; 60];
            for k in 0..m {
                let d = perturbation(&x, &sigma, &kernel, 7, k);
                for (a, b) in s2.iter_mut().zip(d) {
                    *a += b * b;
                }
            }
            for i in [0, 30, 59] {
                let var = s2[i] / m as f64;
                let rel = var / (sigma[i] * sigma[i]) - 1.0;
                assert!(rel.abs() < 0.09, "ell {ell} knot {i}: {rel}");
            }
        }
    }
}
