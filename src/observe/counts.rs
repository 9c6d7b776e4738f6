//! D(x) of streamed trajectories: transition counts and conditional moments at several lags fed
//! chunk by chunk, and the propagator analysis `observe --diffusion` runs on them.
//!
//! [`LagCounter`] is a [`Sink`]. It keeps the last (largest lag) positions of the current
//! trajectory in a ring buffer; for each new sample x(t) and each lag L it adds the pair
//! (x(t − L), x(t)) to the bin-to-bin counts of that lag when both ends lie in the bins, and the
//! increment d = x(t) − x(t − L) to the power sums S_k = Σ d^k (k = 0..4) of its starting bin.
//! Memory: the ring plus, per lag, bins² counts and 5 × bins sums, whatever the length. The counts
//! are those of [`propagator::count_transitions`]; the conditional moments those of
//! [`propagator::conditional_moments`] up to rounding, from the sums with μ = S₁/S₀,
//! Σ(d − μ)² = S₂ − S₀μ² and Σ(d − μ)⁴ = S₄ − 4μS₃ + 6μ²S₂ − 3S₀μ⁴.
//!
//! Range ([`range`]): the bins span the positions between the [`TAIL`] and 1 − [`TAIL`] quantiles
//! of the histogram of pass 2, rounded outward to its bin edges, cut into [`DEFAULT_BINS`] equal
//! bins (or [`place_bins`]: as many as keep the lattice's well factor F''Δx²/4 of the most curved
//! well of U at most [`WELL_BIAS_TARGET`], within [`DEFAULT_BINS`]..=[`MAX_BINS`]; the fit costs
//! O(n³) per likelihood evaluation) unless told otherwise. Pairs with an end outside are dropped, so D near the ends rests
//! on fewer transitions (the ends also feel the reflecting walls of the lattice model).
//!
//! Reported lag ([`Diffusion::new`]): the shortest lag whose bin-spread bias Δx²/(12DΔt)
//! ([`propagator::BayesianFit::bin_bias`]) is at most [`propagator::BIN_BIAS_WARN`]; when none
//! is, the lag with the smallest bias. Every lag's fit is kept (the lag scan).
//!
//! Profile values ([`Diffusion::at`]): D between interfaces interpolated linearly in ln D of the
//! posterior medians, σ_D = (97.5% − 2.5% quantile)/(2 × 1.96) in linear D (the Gaussian σ with
//! that 95% width) interpolated linearly; beyond the first or last interface, that interface's
//! values.

use super::propagator::{
    self, BayesSettings, Bins, ConditionalMoments, Counts, LagScan, MomentBin, PropagatorError,
};
use super::{FreeEnergy, ObserveError, Sink};
use serde::Serialize;
use std::io::Write;

/// Probability left out at each end of the range.
pub const TAIL: f64 = 0.005;
/// Bins of D(x) unless told otherwise: fine enough to follow a barrier of a few kT, coarse
/// enough that every bin is visited and the fits stay fast (2 × bins parameters).
pub const DEFAULT_BINS: usize = 30;
/// Lags (frames) unless told otherwise.
pub const DEFAULT_LAGS: [usize; 4] = [1, 2, 5, 10];

/// What `observe` needs for D(x).
#[derive(Debug, Clone, PartialEq)]
pub struct DiffusionOptions {
    /// lags in frames
    pub lags: Vec<usize>,
    /// number of bins (default [`DEFAULT_BINS`])
    pub bins: Option<usize>,
    /// prior, chain length; the seed is the analysis's
    pub settings: BayesSettings,
}

impl Default for DiffusionOptions {
    fn default() -> Self {
        Self {
            lags: DEFAULT_LAGS.to_vec(),
            bins: None,
            settings: BayesSettings::default(),
        }
    }
}

/// The bins between the [`TAIL`] quantiles of the histogram `fe` (see the module comment).
///
/// # Errors
/// Fewer than 3 bins asked for, or a histogram too narrow for a range.
pub fn range(fe: &FreeEnergy, count: usize) -> Result<Bins, ObserveError> {
    let total: u64 = fe.bins.iter().map(|b| b.count).sum();
    let half = fe.bin_width / 2.0;
    let mut seen = 0u64;
    let (mut lo, mut hi) = (f64::NAN, f64::NAN);
    for b in &fe.bins {
        seen += b.count;
        let share = seen as f64 / total as f64;
        if lo.is_nan() && share >= TAIL {
            lo = b.x - half;
        }
        if share >= 1.0 - TAIL {
            hi = b.x + half;
            break;
        }
    }
    Bins::new(lo, hi, count).map_err(|e| ObserveError::Option {
        option: "d_bins",
        message: e.to_string(),
    })
}

/// Largest F''Δx²/4 of a well the automatic bin count accepts: the fit corrects the lattice
/// bias e^{F''Δx²/4} (propagator module doc), a correction checked against exact
/// Ornstein–Uhlenbeck transition counts up to F''Δx² = 0.49 (tests/observe_lattice_bias.rs);
/// finer bins keep it inside that range.
pub const WELL_BIAS_TARGET: f64 = 0.1;
/// Most bins the automatic count takes: every likelihood evaluation diagonalises an n × n
/// matrix (O(n³)), so 120 bins cost about 60 times 30 bins.
pub const MAX_BINS: usize = 120;
/// Energy windows (kT above a minimum) tried in turn for the quadratic fit of a well.
const WELL_WINDOWS: [f64; 3] = [1.0, 2.0, 3.0];
/// Fewest histogram bins a well fit uses (3 parameters, so at least 2 degrees of freedom).
const WELL_FIT_BINS: usize = 5;
/// Smallest share of the samples a well must hold for its curvature to count (a noise dip in
/// a sparse region is not a well).
const WELL_SHARE: f64 = 0.01;

/// The curvature of one well of the histogram U, from a quadratic fit around its minimum.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct WellCurvature {
    /// the lowest histogram bin of the well
    pub x: f64,
    /// U'' (kT per length²) of the fit
    pub curvature: f64,
    /// the fit window: U at most this many kT above the minimum
    pub window_kt: f64,
    /// histogram bins in the window
    pub bins: usize,
}

/// Weighted least squares of U ≈ a + b t + c t² (t = x − x0, weight = samples per bin, since
/// Var U ≈ 1/count); returns 2c, or `None` when the normal equations are singular.
fn quadratic_curvature(
    fe: &FreeEnergy,
    window: std::ops::RangeInclusive<usize>,
    x0: f64,
) -> Option<f64> {
    let mut m = nalgebra::Matrix3::<f64>::zeros();
    let mut r = nalgebra::Vector3::<f64>::zeros();
    for b in &fe.bins[window] {
        let t = b.x - x0;
        let phi = nalgebra::Vector3::new(1.0, t, t * t);
        let w = b.count as f64;
        m += phi * phi.transpose() * w;
        r += phi * (w * b.u);
    }
    m.lu().solve(&r).map(|c| 2.0 * c[2])
}

/// The wells of the histogram U and their curvatures: taking bins in order of rising U, each bin
/// not yet in a window opens one, grown over neighbouring non-empty bins while U stays within
/// `window_kt` of it (the smallest of [`WELL_WINDOWS`] giving [`WELL_FIT_BINS`] bins); the window
/// counts as a well when its minimum is inside it (not against an earlier window: a slope), it
/// holds [`WELL_SHARE`] of the samples and the weighted quadratic fit curves upward. A fit over a
/// window of ±1 kT averages the noise of many histogram bins, unlike a second difference.
pub fn well_curvatures(fe: &FreeEnergy) -> Vec<WellCurvature> {
    let bins = &fe.bins;
    let n = bins.len();
    let total: u64 = bins.iter().map(|b| b.count).sum();
    let adjacent = |i: usize| (bins[i + 1].x - bins[i].x) < 1.5 * fe.bin_width;
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| bins[a].u.total_cmp(&bins[b].u));
    let mut claimed = vec![false; n];
    let mut wells = Vec::new();
    for &i in &order {
        if claimed[i] {
            continue;
        }
        let grow = |kt: f64| {
            let (mut lo, mut hi) = (i, i);
            let fits = |j: usize| !claimed[j] && bins[j].u <= bins[i].u + kt;
            while lo > 0 && adjacent(lo - 1) && fits(lo - 1) {
                lo -= 1;
            }
            while hi + 1 < n && adjacent(hi) && fits(hi + 1) {
                hi += 1;
            }
            (lo, hi)
        };
        let found = WELL_WINDOWS
            .iter()
            .map(|&kt| (kt, grow(kt)))
            .find(|&(_, (lo, hi))| hi + 1 - lo >= WELL_FIT_BINS);
        let (kt, (lo, hi)) = found.unwrap_or((WELL_WINDOWS[0], grow(WELL_WINDOWS[0])));
        let against = |j: Option<usize>| j.is_some_and(|j| claimed[j]);
        let slope = (lo == i && against(i.checked_sub(1)))
            || (hi == i && against((i + 1 < n).then_some(i + 1)));
        claimed[lo..=hi].iter_mut().for_each(|c| *c = true);
        let share = bins[lo..=hi].iter().map(|b| b.count).sum::<u64>() as f64 / total as f64;
        if found.is_none() || slope || share < WELL_SHARE {
            continue;
        }
        if let Some(c) = quadratic_curvature(fe, lo..=hi, bins[i].x).filter(|c| *c > 0.0) {
            wells.push(WellCurvature {
                x: bins[i].x,
                curvature: c,
                window_kt: kt,
                bins: hi + 1 - lo,
            });
        }
    }
    wells.sort_by(|a, b| a.x.total_cmp(&b.x));
    wells
}

/// The automatic bin count over a range of `width`: the fewest bins keeping F''Δx²/4 of the most
/// curved well at [`WELL_BIAS_TARGET`], n = ⌈width·√(F''/(4 × target))⌉, within
/// [[`DEFAULT_BINS`], [`MAX_BINS`]] ([`DEFAULT_BINS`] without a well).
pub fn auto_bin_count(wells: &[WellCurvature], width: f64) -> usize {
    let k = wells.iter().map(|w| w.curvature).fold(0.0, f64::max);
    let n = (width * (k / (4.0 * WELL_BIAS_TARGET)).sqrt()).ceil();
    if n.is_finite() {
        (n as usize).clamp(DEFAULT_BINS, MAX_BINS)
    } else {
        DEFAULT_BINS
    }
}

/// The bins of `observe --diffusion`: the [`range`], cut into `requested` bins or, by default,
/// the [`auto_bin_count`] of the histogram's wells; with the rule in words.
///
/// # Errors
/// As [`range`].
pub fn place_bins(
    fe: &FreeEnergy,
    requested: Option<usize>,
) -> Result<(Bins, String), ObserveError> {
    let span = range(fe, DEFAULT_BINS)?;
    let quantiles = format!(
        "between the {}% and {}% quantiles of the positions, read off the histogram and rounded outward to its bins",
        100.0 * TAIL,
        100.0 * (1.0 - TAIL)
    );
    let (count, how) = match requested {
        Some(n) => (n, "as asked".to_string()),
        None => {
            let wells = well_curvatures(fe);
            let n = auto_bin_count(&wells, span.hi - span.lo);
            let steepest = wells.iter().map(|w| w.curvature).fold(0.0, f64::max);
            let dx = (span.hi - span.lo) / n as f64;
            (
                n,
                format!(
                    "chosen so that the lattice bias F''Δx²/4 of the most curved well (F'' = {steepest:.3e} kT/length² from a quadratic fit of U around each minimum) is at most {:.0}% ({:.1}% here), within {DEFAULT_BINS}..={MAX_BINS} bins",
                    100.0 * WELL_BIAS_TARGET,
                    100.0 * steepest * dx * dx / 4.0
                ),
            )
        }
    };
    let bins = range(fe, count)?;
    Ok((bins, format!("{quantiles}; {count} bins {how}")))
}

/// Power sums of the increments starting in one bin.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct Sums {
    n: u64,
    s: [f64; 4],
}

/// Streamed counts and increments at several lags (see the module comment).
#[derive(Debug, Clone)]
pub struct LagCounter {
    bins: Bins,
    lags: Vec<usize>,
    /// the last `ring.len()` positions and their bins, at `seen % ring.len()`
    ring: Vec<(f64, Option<usize>)>,
    /// samples of the current trajectory so far
    seen: usize,
    /// per lag: counts `n[from * bins + to]`
    counts: Vec<Vec<u64>>,
    /// per lag and starting bin
    sums: Vec<Vec<Sums>>,
    /// per lag: pairs seen, inside the bins or not
    pairs: Vec<u64>,
    /// (sampling interval, samples) of each finished trajectory
    trajectories: Vec<(f64, usize)>,
}

impl LagCounter {
    /// A counter for `lags` (frames, each ≥ 1) on `bins`.
    pub fn new(bins: Bins, lags: &[usize]) -> Self {
        let n = bins.count;
        let longest = lags.iter().copied().max().unwrap_or(1);
        Self {
            bins,
            lags: lags.to_vec(),
            ring: vec![(0.0, None); longest],
            seen: 0,
            counts: vec![vec![0; n * n]; lags.len()],
            sums: vec![vec![Sums::default(); n]; lags.len()],
            pairs: vec![0; lags.len()],
            trajectories: Vec::new(),
        }
    }

    /// The counts of each lag.
    pub fn counts(&self) -> Vec<Counts> {
        self.lags
            .iter()
            .zip(&self.counts)
            .map(|(&lag, n)| Counts {
                bins: self.bins.count,
                lag,
                n: n.clone(),
            })
            .collect()
    }

    /// Pairs (x(t), x(t + lag)) seen at each lag, inside the bins or not.
    pub fn pairs(&self) -> &[u64] {
        &self.pairs
    }

    /// (sampling interval, samples) of each trajectory fed.
    pub fn trajectories(&self) -> &[(f64, usize)] {
        &self.trajectories
    }

    /// The conditional-moment D(x) of lag number `k` (frames of `interval`).
    pub fn moments(&self, k: usize, interval: f64) -> ConditionalMoments {
        let lag = self.lags[k];
        let tau = lag as f64 * interval;
        let bins = self.sums[k]
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let m = s.n as f64;
                let (mut drift, mut d_raw, mut d, mut d_se) = (None, None, None, None);
                if s.n >= 2 {
                    let [s1, s2, s3, s4] = s.s;
                    let mu = s1 / m;
                    let c2 = s2 - m * mu * mu;
                    let c4 = s4 - 4.0 * mu * s3 + 6.0 * mu * mu * s2 - 3.0 * m * mu.powi(4);
                    let var = c2 / (m - 1.0);
                    // Σ((d − μ)² − var)² = Σ(d − μ)⁴ − 2 var Σ(d − μ)² + m var²
                    let var_sq = (c4 - 2.0 * var * c2 + m * var * var).max(0.0) / (m - 1.0);
                    let n_eff = (m / lag as f64).max(1.0);
                    drift = Some(mu / tau);
                    d_raw = Some(s2 / m / (2.0 * tau));
                    d = Some(var / (2.0 * tau));
                    d_se = Some((var_sq / n_eff).sqrt() / (2.0 * tau));
                }
                MomentBin {
                    x: self.bins.centre(i),
                    samples: s.n,
                    drift,
                    d_raw,
                    d,
                    d_se,
                }
            })
            .collect();
        ConditionalMoments {
            lag_frames: lag,
            lag_time: tau,
            bins,
            note: propagator::MOMENT_NOTE,
        }
    }
}

impl Sink for LagCounter {
    fn feed(&mut self, xs: &[f64]) {
        let n = self.bins.count;
        let cap = self.ring.len();
        for &x in xs {
            let to = self.bins.index(x);
            for (k, &lag) in self.lags.iter().enumerate() {
                if self.seen < lag {
                    continue;
                }
                self.pairs[k] += 1;
                let (x0, from) = self.ring[(self.seen - lag) % cap];
                if let Some(from) = from {
                    if let Some(to) = to {
                        self.counts[k][from * n + to] += 1;
                    }
                    let d = x - x0;
                    let s = &mut self.sums[k][from];
                    s.n += 1;
                    let d2 = d * d;
                    s.s[0] += d;
                    s.s[1] += d2;
                    s.s[2] += d2 * d;
                    s.s[3] += d2 * d2;
                }
            }
            self.ring[self.seen % cap] = (x, to);
            self.seen += 1;
        }
    }

    fn end(&mut self, dt: f64) {
        self.trajectories.push((dt, self.seen));
        self.seen = 0;
    }
}

/// D(x) at one interface at the reported lag, beside the conditional-moment estimate.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DRow {
    /// position of the interface
    pub x: f64,
    /// posterior median of D
    pub d: f64,
    /// its 95% posterior interval
    pub ci95: [f64; 2],
    /// (ci95 width)/(2 × 1.96)
    pub sigma_d: f64,
    /// conditional-moment D: the mean of the two bins beside the interface
    pub moments_d: Option<f64>,
    /// its standard error
    pub moments_se: Option<f64>,
}

/// Pairs at one lag.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PairsAtLag {
    /// lag in frames
    pub lag_frames: usize,
    /// pairs (x(t), x(t + lag)) in the trajectories
    pub pairs: u64,
    /// of which both ends lie in the bins (the counts)
    pub counted: u64,
    /// the share dropped
    pub dropped_fraction: f64,
}

/// The D(x) analysis of `observe` (positions and times in the files' units, D in length²/time).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Diffusion {
    /// the bins
    pub bins: Bins,
    /// how the bins were placed
    pub range_rule: String,
    /// the sampling interval the lags are counted in
    pub interval: f64,
    /// pairs counted and dropped per lag
    pub pairs: Vec<PairsAtLag>,
    /// the lag (frames) whose D is reported in `interfaces`
    pub lag_frames: usize,
    /// that lag in time
    pub lag_time: f64,
    /// how that lag was chosen
    pub lag_rule: String,
    /// D at every interface at the reported lag
    pub interfaces: Vec<DRow>,
    /// the Bayesian fits at every lag and their agreement
    pub scan: LagScan,
    /// the conditional-moment D(x) at every lag
    pub moments: Vec<ConditionalMoments>,
    /// what to keep in mind
    pub notes: Vec<String>,
    /// the fits' warnings and the lag scan's
    pub warnings: Vec<String>,
}

/// A propagator error as an option error.
fn option_error(e: PropagatorError) -> ObserveError {
    let option = match e {
        PropagatorError::BadLag { .. } => "lags",
        _ => "d_bins",
    };
    ObserveError::Option {
        option,
        message: e.to_string(),
    }
}

impl Diffusion {
    /// Fits the counts of `counter` at every lag and assembles the report.
    ///
    /// # Errors
    /// Trajectories with different sampling intervals, or a bin without any count.
    pub fn new(
        counter: &LagCounter,
        settings: &BayesSettings,
        range_rule: String,
    ) -> Result<Self, ObserveError> {
        let t = counter.trajectories();
        let samples: usize = t.iter().map(|p| p.1).sum();
        let interval = t.iter().map(|&(dt, n)| dt * n as f64).sum::<f64>() / samples as f64;
        if let Some(&(dt, _)) = t
            .iter()
            .find(|p| (p.0 - interval).abs() > super::read::TIME_TOL * interval)
        {
            return Err(ObserveError::Option {
                option: "diffusion",
                message: format!(
                    "the trajectories have sampling intervals {dt} and about {interval}: lags are counted in frames, so they need one interval"
                ),
            });
        }
        let bins = counter.bins;
        let scan = propagator::scan_counts(&counter.counts(), interval, &bins, settings)
            .map_err(option_error)?;
        let pairs: Vec<PairsAtLag> = scan
            .fits
            .iter()
            .zip(counter.pairs())
            .map(|(f, &p)| PairsAtLag {
                lag_frames: f.lag_frames,
                pairs: p,
                counted: f.transitions,
                dropped_fraction: 1.0 - f.transitions as f64 / p.max(1) as f64,
            })
            .collect();
        let chosen = scan
            .fits
            .iter()
            .position(|f| f.bin_bias <= propagator::BIN_BIAS_WARN)
            .unwrap_or_else(|| {
                (0..scan.fits.len())
                    .min_by(|&a, &b| scan.fits[a].bin_bias.total_cmp(&scan.fits[b].bin_bias))
                    .unwrap_or(0)
            });
        let moments: Vec<ConditionalMoments> = (0..scan.fits.len())
            .map(|k| counter.moments(k, interval))
            .collect();
        let fit = &scan.fits[chosen];
        let m = &moments[chosen].bins;
        let interfaces = fit
            .diffusion
            .iter()
            .enumerate()
            .map(|(k, i)| {
                let (a, b) = (&m[k], &m[k + 1]);
                DRow {
                    x: i.x,
                    d: i.median,
                    ci95: i.ci95,
                    sigma_d: (i.ci95[1] - i.ci95[0]) / (2.0 * 1.96),
                    moments_d: a.d.zip(b.d).map(|(p, q)| (p + q) / 2.0),
                    moments_se: a.d_se.zip(b.d_se).map(|(p, q)| p.hypot(q) / 2.0),
                }
            })
            .collect();
        let worst = pairs
            .iter()
            .max_by(|a, b| a.dropped_fraction.total_cmp(&b.dropped_fraction));
        let mut notes = vec![format!(
            "pairs (x(t), x(t + lag)) with an end outside the bins are dropped ({}), so D near the ends rests on fewer transitions and is less reliable there",
            worst.map_or(String::new(), |w| format!(
                "up to {:.1}% of them, at lag {} frames",
                100.0 * w.dropped_fraction,
                w.lag_frames
            ))
        )];
        notes.push(format!(
            "the lattice model raises D by about Δx²/(12DΔt) where the free energy is flat ({:.1}% at lag {} frames, taken at the smallest D) and by about F''Δx²/4 in a well of curvature F'' (kT per length²) unless the lattice correction is on",
            100.0 * fit.bin_bias,
            fit.lag_frames
        ));
        notes.push(propagator::MOMENT_NOTE.to_string());
        let mut warnings: Vec<String> = scan
            .fits
            .iter()
            .flat_map(|f| {
                f.warnings
                    .iter()
                    .map(move |w| format!("lag {}: {w}", f.lag_frames))
            })
            .collect();
        warnings.extend(scan.warning.iter().cloned());
        Ok(Self {
            bins,
            range_rule,
            interval,
            pairs,
            lag_frames: fit.lag_frames,
            lag_time: fit.lag_time,
            lag_rule: format!(
                "the shortest lag whose bin-spread bias Δx²/(12DΔt) is at most {:.0}%, else the least biased",
                100.0 * propagator::BIN_BIAS_WARN
            ),
            interfaces,
            scan,
            moments,
            notes,
            warnings,
        })
    }

    /// D and σ_D at `x` (see the module comment); `None` without an interface.
    pub fn at(&self, x: f64) -> Option<(f64, f64)> {
        let rows = &self.interfaces;
        let (first, last) = (rows.first()?, rows.last()?);
        if x <= first.x {
            return Some((first.d, first.sigma_d));
        }
        if x >= last.x {
            return Some((last.d, last.sigma_d));
        }
        let k = rows.partition_point(|r| r.x <= x).max(1) - 1;
        let (a, b) = (&rows[k], &rows[k + 1]);
        let w = (x - a.x) / (b.x - a.x);
        let ln_d = (1.0 - w) * a.d.ln() + w * b.d.ln();
        Some((ln_d.exp(), (1.0 - w) * a.sigma_d + w * b.sigma_d))
    }
}

/// Writes the profile table of [`super::write_profile`] with two more columns, D and sigma_D at
/// each row's x ([`Diffusion::at`], in length²/time). Returns the rows written.
///
/// # Errors
/// The writer's.
pub fn write_profile_with_diffusion<W: Write>(
    fe: &FreeEnergy,
    energy_per_kt: f64,
    d: &Diffusion,
    mut out: W,
) -> std::io::Result<usize> {
    let mut plain = Vec::new();
    let rows = super::write_profile(fe, energy_per_kt, &mut plain)?;
    let text = String::from_utf8_lossy(&plain);
    for line in text.lines() {
        if line.starts_with('#') {
            writeln!(out, "{line}")?;
        } else if line.starts_with('x') {
            writeln!(
                out,
                "# D: posterior median of the propagator fit at lag {} frames, interpolated in ln D between its interfaces; sigma_D = (97.5% - 2.5% quantile)/(2 x 1.96); constant beyond [{}, {}]",
                d.lag_frames,
                d.interfaces.first().map_or(f64::NAN, |r| r.x),
                d.interfaces.last().map_or(f64::NAN, |r| r.x),
            )?;
            writeln!(out, "{line},D,sigma_D")?;
        } else {
            let x: f64 = line
                .split(',')
                .next()
                .and_then(|f| f.parse().ok())
                .unwrap_or(f64::NAN);
            let (dx, sd) = d.at(x).unwrap_or((f64::NAN, f64::NAN));
            writeln!(out, "{line},{dx},{sd}")?;
        }
    }
    Ok(rows)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn walk(n: usize) -> Vec<f64> {
        // a deterministic, irregular path through [0, 3) and beyond
        (0..n)
            .map(|i| 1.5 + 1.7 * ((i as f64) * 0.37).sin() + 0.2 * ((i as f64) * 2.3).cos())
            .collect()
    }

    /// The streamed counts equal the in-memory ones, the moments agree to rounding (power sums
    /// against two-pass sums: 1e-9 relative), across two trajectories and any chunking.
    #[test]
    fn streamed_counts_equal_the_in_memory_ones() {
        let bins = Bins::new(0.0, 3.0, 6).unwrap();
        let (a, b) = (walk(500), walk(333));
        let lags = [1, 3, 7];
        for chunk in [1, 5, 1000] {
            let mut c = LagCounter::new(bins, &lags);
            for t in [&a, &b] {
                t.chunks(chunk).for_each(|p| c.feed(p));
                c.end(0.1);
            }
            for (k, &lag) in lags.iter().enumerate() {
                let want = propagator::count_transitions(&[&a, &b], &bins, lag).unwrap();
                assert_eq!(c.counts()[k], want);
                assert_eq!(c.pairs()[k], (500 - lag + 333 - lag) as u64);
                let m = propagator::conditional_moments(&[&a, &b], 0.1, &bins, lag).unwrap();
                let s = c.moments(k, 0.1);
                for (p, q) in m.bins.iter().zip(&s.bins) {
                    assert_eq!(p.samples, q.samples);
                    for (u, v) in [(p.d, q.d), (p.d_raw, q.d_raw), (p.d_se, q.d_se)] {
                        let (u, v) = (u.unwrap(), v.unwrap());
                        assert!((u - v).abs() <= 1e-9 * u.abs(), "lag {lag}: {u} vs {v}");
                    }
                }
            }
        }
    }
}
