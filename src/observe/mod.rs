//! Observed trajectories: what a user's own time series of one coordinate says about the
//! landscape and the kinetics, without a model.
//!
//! The module owns reading trajectory files ([`read`]: plain-text columns and NumPy `.npy`),
//! the streamed accumulators fed from them, the integrated autocorrelation time
//! ([`correlation`]), the Boltzmann-inverted free energy with its block-bootstrap σ_U
//! ([`free_energy`]), the core-to-core kinetics ([`kinetics`]), position-dependent diffusion by
//! the Bayesian propagator method and conditional moments ([`propagator`]), and D from umbrella
//! windows ([`umbrella`]), and friction and memory time from velocities (the velocity
//! autocorrelation and the Volterra-inverted memory kernel, [`velocity`]). Reading and the first three are streamed: each
//! pass reads every file once and feeds fixed-size accumulators, so memory does not grow with the
//! length of a trajectory.
//!
//! [`analyse`] makes three passes over the sources:
//! 1. moments, range and the multiple-tau autocorrelation of the position (→ τ_int);
//! 2. the histogram, kept per block of ≥ [`free_energy::BLOCK_TAU`] τ_int samples (→ U, σ_U);
//! 3. the transition counters for the cores (given, or placed from U) and their shrunk and grown
//!    variants; with [`Options::diffusion`], also the bin-to-bin counts and increments at several
//!    lags on bins placed from the histogram ([`counts`]), from which D(x) is fitted.
//!
//! With [`Options::friction`] a fourth pass, run first so that a bad velocity column fails at
//! once, keeps the positions and velocities (a velocity column, or central differences of the
//! positions) of every trajectory in memory for [`velocity`]'s correlations, with the mean force
//! U′(x) of the pass-2 free energy along them: 24 bytes per sample (positions, velocities,
//! U′(x)).
//!
//! [`windows`] reads restrained (umbrella) windows instead: one file per window, each held in
//! memory (8 bytes per sample), D at its mean position by [`umbrella::window_diffusion`]; no
//! free energy or kinetics, which a restrained coordinate does not show.
//!
//! Units: positions and times are taken as they are in the files (the caller converts to the
//! scenario's units); energies are in kT; masses in kT·time²/length².

pub mod correlation;
pub mod counts;
pub mod free_energy;
pub mod kinetics;
pub mod propagator;
pub mod read;
pub mod umbrella;
pub mod velocity;

use serde::Serialize;
use thiserror::Error;

pub use free_energy::{FreeEnergy, write_profile};
pub use kinetics::{Interval, Kinetics};
pub use read::{ColumnRef, Columns, FileInfo, Pick, Source};

/// An error in reading or analysing observed trajectories; every message names its file (and the
/// line or row) or the option at fault.
#[derive(Debug, Error)]
pub enum ObserveError {
    /// The file could not be opened or read.
    #[error("{file}: cannot read: {message}")]
    Io {
        /// the file
        file: String,
        /// the system's message
        message: String,
    },
    /// A problem at one place of a file (a line of a text file, a row of a .npy array).
    #[error("{file}: {place}: {message}")]
    At {
        /// the file
        file: String,
        /// "line 12" or "row 12"
        place: String,
        /// what is wrong
        message: String,
    },
    /// A problem with a file as a whole (its header, its length).
    #[error("{file}: {message}")]
    File {
        /// the file
        file: String,
        /// what is wrong
        message: String,
    },
    /// An inconsistent or impossible option.
    #[error("{option}: {message}")]
    Option {
        /// the option's name
        option: &'static str,
        /// what is wrong
        message: String,
    },
}

/// A consumer of the samples of one trajectory after another, fed in chunks. Accumulators process
/// sample by sample, so their state never depends on how the chunks are cut.
pub trait Sink {
    /// The next samples of the current trajectory.
    fn feed(&mut self, xs: &[f64]);
    /// The current trajectory ended; `dt` is its sampling interval.
    fn end(&mut self, dt: f64);
}

impl<A: Sink, B: Sink> Sink for (A, B) {
    fn feed(&mut self, xs: &[f64]) {
        self.0.feed(xs);
        self.1.feed(xs);
    }
    fn end(&mut self, dt: f64) {
        self.0.end(dt);
        self.1.end(dt);
    }
}

impl<S: Sink + ?Sized> Sink for &mut S {
    fn feed(&mut self, xs: &[f64]) {
        (**self).feed(xs);
    }
    fn end(&mut self, dt: f64) {
        (**self).end(dt);
    }
}

impl<S: Sink> Sink for [S] {
    fn feed(&mut self, xs: &[f64]) {
        for s in self.iter_mut() {
            s.feed(xs);
        }
    }
    fn end(&mut self, dt: f64) {
        for s in self.iter_mut() {
            s.end(dt);
        }
    }
}

/// Default number of bootstrap resamples: the Monte Carlo error of a standard deviation from B
/// resamples is about 1/sqrt(2B), 5% at 200.
pub const DEFAULT_RESAMPLES: usize = 200;

/// What to read and how to analyse it.
#[derive(Debug, Clone)]
pub struct Options {
    /// which columns hold the position and the time
    pub columns: Columns,
    /// a fixed sampling interval (when the files have no time column)
    pub dt: Option<f64>,
    /// histogram bin width (default: Scott's rule, see [`free_energy::binning`])
    pub bin_width: Option<f64>,
    /// the cores [A, B] (default: placed around the two deepest minima of U)
    pub cores: Option<[Interval; 2]>,
    /// seed of the bootstrap
    pub seed: u64,
    /// bootstrap resamples
    pub resamples: usize,
    /// samples per chunk handed to the accumulators (results do not depend on it)
    pub chunk: usize,
    /// also D(x) by the propagator method (the posterior's seed is `seed`)
    pub diffusion: Option<counts::DiffusionOptions>,
    /// also friction and memory from velocities (the bootstrap's seed and resamples are `seed`
    /// and `resamples`)
    pub friction: Option<FrictionOptions>,
}

/// Where the velocities of the friction analysis come from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum VelocitySource {
    /// a column of the files
    Column(ColumnRef),
    /// central differences of the positions
    CentralDifference,
}

/// What the friction analysis needs besides the files.
#[derive(Debug, Clone, PartialEq)]
pub struct FrictionOptions {
    /// the velocities
    pub velocities: VelocitySource,
    /// the mass in kT·time²/length² (default: equipartition)
    pub mass: Option<f64>,
}

impl Default for Options {
    fn default() -> Self {
        Self {
            columns: Columns::default(),
            dt: None,
            bin_width: None,
            cores: None,
            seed: 1,
            resamples: DEFAULT_RESAMPLES,
            chunk: read::CHUNK,
            diffusion: None,
            friction: None,
        }
    }
}

/// Fewer samples than this over all trajectories is an error: no histogram or correlation time
/// can be estimated from them.
pub const MIN_SAMPLES: u64 = 100;

/// The position's summary over all trajectories.
#[derive(Debug, Clone, Serialize)]
pub struct PositionSummary {
    /// smallest position
    pub min: f64,
    /// largest position
    pub max: f64,
    /// mean
    pub mean: f64,
    /// standard deviation
    pub sd: f64,
}

/// Everything the trajectories say, in the files' length and time units (energies in kT).
#[derive(Debug, Clone, Serialize)]
pub struct ObservedReport {
    /// the trajectories read
    pub trajectories: Vec<FileInfo>,
    /// samples over all trajectories
    pub samples: u64,
    /// total observed time
    pub total_time: f64,
    /// position summary
    pub position: PositionSummary,
    /// integrated autocorrelation time of the position
    pub correlation: correlation::Autocorrelation,
    /// U(x) = −ln p(x) with σ_U
    pub free_energy: FreeEnergy,
    /// core-to-core kinetics
    pub kinetics: Kinetics,
    /// D(x) (null unless asked for)
    pub diffusion: Option<counts::Diffusion>,
    /// friction and memory from velocities (null unless asked for; the mass in kT·time²/length²)
    pub friction: Option<velocity::Friction>,
    /// everything the user should know (also repeated in the parts)
    pub warnings: Vec<String>,
}

/// One pass over all sources into `sink`, returning what was read of each.
fn pass<S: Sink + ?Sized>(
    sources: &[Source],
    opts: &Options,
    sink: &mut S,
) -> Result<Vec<FileInfo>, ObserveError> {
    sources
        .iter()
        .map(|s| read::stream(s, &opts.columns, opts.dt, opts.chunk.max(1), sink))
        .collect()
}

/// Analyses the trajectories `sources`: three streamed passes (see the module comment).
///
/// # Errors
/// A file that cannot be read or holds a bad value (see [`ObserveError`]), fewer than
/// [`MIN_SAMPLES`] samples in all, bad options, or no two free-energy minima to place the cores.
pub fn analyse(sources: &[Source], opts: &Options) -> Result<ObservedReport, ObserveError> {
    if sources.is_empty() {
        return Err(ObserveError::Option {
            option: "trajectories",
            message: "no trajectory given".into(),
        });
    }
    if let Some(dt) = opts.dt
        && !(dt.is_finite() && dt > 0.0)
    {
        return Err(ObserveError::Option {
            option: "dt",
            message: format!("the sampling interval must be positive, not {dt}"),
        });
    }
    // the velocities first: a bad velocity column fails before the long passes
    let kept = match &opts.friction {
        Some(f) => Some(keep_velocities(sources, opts, f)?),
        None => None,
    };
    // pass 1: moments and autocorrelation
    let mut first = (
        correlation::Moments::default(),
        correlation::Correlator::new(),
    );
    let infos = pass(sources, opts, &mut first)?;
    let (moments, corr) = first;
    let samples = moments.count();
    if samples < MIN_SAMPLES {
        return Err(ObserveError::File {
            file: infos
                .iter()
                .map(|i| i.name.as_str())
                .collect::<Vec<_>>()
                .join(", "),
            message: format!(
                "{samples} samples in all; at least {MIN_SAMPLES} are needed for a histogram and a correlation time"
            ),
        });
    }
    let mut warnings = Vec::new();
    let correlation = corr.autocorrelation();
    if !correlation.converged {
        warnings.push(format!(
            "the autocorrelation window did not close (τ_int ≥ {:.3e} samples): the trajectories are shorter than about {} τ_int, so σ_U and the correlation time are lower bounds",
            correlation.tau_int,
            correlation::SOKAL_C
        ));
    }
    // pass 2: block histogram
    let binning = free_energy::binning(&moments, opts.bin_width)?;
    let block = free_energy::block_length(samples, correlation.tau_int);
    let mut hist = free_energy::BlockHistogram::new(binning, block);
    pass(sources, opts, &mut hist)?;
    let free_energy = free_energy::free_energy(&hist, &correlation, opts.resamples, opts.seed);
    warnings.extend(free_energy.notes.iter().cloned());
    // pass 3: kinetics
    let cores = match opts.cores {
        Some(c) => kinetics::check_cores(c)?,
        None => kinetics::auto_cores(&free_energy)?,
    };
    let variants = kinetics::variants(cores);
    let mut counters: Vec<kinetics::Counter> = variants
        .iter()
        .map(|&c| kinetics::Counter::new(c))
        .collect();
    let mut lag_counter = match &opts.diffusion {
        Some(d) => Some(diffusion_counter(&free_energy, d)?),
        None => None,
    };
    match &mut lag_counter {
        Some((c, _)) => pass(sources, opts, &mut (counters.as_mut_slice(), c))?,
        None => pass(sources, opts, counters.as_mut_slice())?,
    };
    let kinetics = kinetics::Kinetics::new(&counters, opts.cores.is_some());
    warnings.extend(kinetics.warnings.iter().cloned());
    let diffusion = match (lag_counter, &opts.diffusion) {
        (Some((c, rule)), Some(d)) => {
            let settings = propagator::BayesSettings {
                seed: opts.seed,
                ..d.settings
            };
            let r = counts::Diffusion::new(&c, &settings, rule)?;
            warnings.extend(r.warnings.iter().cloned());
            Some(r)
        }
        _ => None,
    };
    let position = moments.summary();
    let friction = match (kept, &opts.friction) {
        (Some((series, dt)), Some(f)) => {
            let r = friction(series, dt, f, &free_energy, opts)?;
            warnings.extend(r.warnings.iter().cloned());
            Some(r)
        }
        _ => None,
    };
    let total_time = infos.iter().map(|i| i.duration).sum();
    Ok(ObservedReport {
        samples,
        total_time,
        position,
        trajectories: infos,
        correlation,
        free_energy,
        kinetics,
        diffusion,
        friction,
        warnings,
    })
}

/// The streamed counter of the D(x) pass on bins placed from the histogram, with the rule in
/// words.
fn diffusion_counter(
    fe: &FreeEnergy,
    d: &counts::DiffusionOptions,
) -> Result<(counts::LagCounter, String), ObserveError> {
    let mut lags = d.lags.clone();
    lags.sort_unstable();
    lags.dedup();
    if lags.is_empty() || lags[0] == 0 {
        return Err(ObserveError::Option {
            option: "lags",
            message: "give one or more lags of at least 1 frame".into(),
        });
    }
    let count = d.bins.unwrap_or(counts::DEFAULT_BINS);
    let bins = counts::range(fe, count)?;
    let rule = format!(
        "between the {}% and {}% quantiles of the positions, read off the histogram and rounded outward to its bins",
        100.0 * counts::TAIL,
        100.0 * (1.0 - counts::TAIL)
    );
    Ok((counts::LagCounter::new(bins, &lags), rule))
}

/// The option a friction analysis answers to.
fn friction_option(f: &FrictionOptions) -> &'static str {
    match f.velocities {
        VelocitySource::Column(_) => "velocity",
        VelocitySource::CentralDifference => "friction",
    }
}

/// The kept series of the friction analysis: positions, and the velocities of a column.
struct Kept {
    positions: Vec<Vec<f64>>,
    velocities: Option<Vec<Vec<f64>>>,
}

/// Every trajectory's positions (and velocities, from a column) in memory, with the common
/// sampling interval.
fn keep_velocities(
    sources: &[Source],
    opts: &Options,
    f: &FrictionOptions,
) -> Result<(Kept, f64), ObserveError> {
    let collect = |pick: Pick| -> Result<read::Collect, ObserveError> {
        let mut keep = read::Collect::default();
        for s in sources {
            read::stream_column(
                s,
                &opts.columns,
                opts.dt,
                opts.chunk.max(1),
                pick.clone(),
                &mut keep,
            )?;
        }
        Ok(keep)
    };
    let velocities = match &f.velocities {
        VelocitySource::Column(c) => Some(collect(Pick::Velocity(c.clone()))?),
        VelocitySource::CentralDifference => None,
    };
    let keep = collect(Pick::Position)?;
    let dt = keep.series[0].1;
    if let Some((i, (_, other))) = keep
        .series
        .iter()
        .enumerate()
        .find(|(_, (_, d))| (d - dt).abs() > read::TIME_TOL * dt)
    {
        return Err(ObserveError::Option {
            option: friction_option(f),
            message: format!(
                "trajectory {} is sampled every {other}, the first every {dt}: the velocity correlation needs one sampling interval",
                i + 1
            ),
        });
    }
    let series = |c: read::Collect| c.series.into_iter().map(|(v, _)| v).collect();
    Ok((
        Kept {
            velocities: velocities.map(series),
            positions: series(keep),
        },
        dt,
    ))
}

/// The friction analysis of the kept series, with the mean force of the free energy `fe`.
fn friction(
    kept: Kept,
    dt: f64,
    f: &FrictionOptions,
    fe: &FreeEnergy,
    opts: &Options,
) -> Result<velocity::Friction, ObserveError> {
    let vo = velocity::Options {
        mass: f.mass,
        force: velocity::MeanForce::from_free_energy(fe),
        seed: opts.seed,
        resamples: opts.resamples,
    };
    let xs: Vec<&[f64]> = kept.positions.iter().map(Vec::as_slice).collect();
    let r = match &kept.velocities {
        Some(vs) => {
            let vs: Vec<&[f64]> = vs.iter().map(Vec::as_slice).collect();
            velocity::from_velocities_and_positions(&vs, &xs, dt, &vo)
        }
        None => velocity::from_positions(&xs, dt, &vo),
    };
    r.map_err(|e| ObserveError::Option {
        option: friction_option(f),
        message: e.to_string(),
    })
}

/// One restrained window: the file and D at its mean position.
#[derive(Debug, Clone, Serialize)]
pub struct Window {
    /// what was read
    pub trajectory: FileInfo,
    /// the spring constant in kT/length²
    #[serde(rename = "spring_kT")]
    pub spring_kt: f64,
    /// D at the mean position
    #[serde(flatten)]
    pub diffusion: umbrella::WindowDiffusion,
}

/// D at the mean position of each restrained window: `sources[i]` held by a spring
/// `springs[i]` (kT/length²); positions read as in [`analyse`], each window in memory.
///
/// # Errors
/// A file that cannot be read, a spring that is not positive, as many springs as files or one
/// for all not given, or a window too short for its correlation time (each names the file).
pub fn windows(
    sources: &[Source],
    springs: &[f64],
    opts: &Options,
) -> Result<Vec<Window>, ObserveError> {
    if sources.is_empty() {
        return Err(ObserveError::Option {
            option: "trajectories",
            message: "no trajectory given".into(),
        });
    }
    if springs.len() != 1 && springs.len() != sources.len() {
        return Err(ObserveError::Option {
            option: "spring",
            message: format!(
                "{} spring constants for {} windows: give one for all or one per file",
                springs.len(),
                sources.len()
            ),
        });
    }
    if let Some(k) = springs.iter().find(|k| !(k.is_finite() && **k > 0.0)) {
        return Err(ObserveError::Option {
            option: "spring",
            message: format!("a spring constant must be positive, not {k}"),
        });
    }
    sources
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let k = springs[if springs.len() == 1 { 0 } else { i }];
            let mut keep = read::Collect::default();
            let info = read::stream(s, &opts.columns, opts.dt, opts.chunk.max(1), &mut keep)?;
            let (x, dt) = &keep.series[0];
            let diffusion =
                umbrella::window_diffusion(x, *dt, k).map_err(|e| ObserveError::File {
                    file: info.name.clone(),
                    message: e.to_string(),
                })?;
            Ok(Window {
                trajectory: info,
                spring_kt: k,
                diffusion,
            })
        })
        .collect()
}
