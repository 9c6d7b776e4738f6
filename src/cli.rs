//! Command-line definitions (clap only; no computation here).

use clap::{Args, Parser, Subcommand};
use std::path::PathBuf;

/// Thermally activated barrier-crossing rates from a potential profile.
#[derive(Debug, Parser)]
#[command(name = "escapade", version, about, propagate_version = true)]
pub struct Cli {
    /// what to do
    #[command(subcommand)]
    pub command: Command,
    /// No progress or notes on stderr (errors, warnings in the output and "interrupted" remain).
    #[arg(long, short, global = true)]
    pub quiet: bool,
}

/// Options every command accepts.
#[derive(Debug, Args, Clone)]
pub struct Common {
    /// Print one JSON object on stdout instead of tables.
    #[arg(long)]
    pub json: bool,
    /// Override one scenario value, e.g. --set particle.friction=3 (repeatable).
    #[arg(long = "set", value_name = "SECTION.KEY=VALUE")]
    pub set: Vec<String>,
}

/// Options of the commands that simulate.
#[derive(Debug, Args, Clone)]
pub struct SimOpts {
    /// Worker threads (default: all cores); results do not depend on it.
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub threads: usize,
    /// Append each finished trajectory to this CSV record file.
    #[arg(long, value_name = "FILE")]
    pub records: Option<PathBuf>,
    /// Continue the run in --records, skipping the trajectories already recorded.
    #[arg(long, requires = "records")]
    pub resume: bool,
    /// Run only part K of N of the trajectory indices (for job arrays), e.g. --shard 2/8.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
}

/// Observed trajectories for `compare`.
#[derive(Debug, Args, Clone)]
pub struct ObservedRun {
    /// trajectory files in the scenario's units (text columns or .npy, as `observe` reads them),
    /// whose core-to-core rate is set beside the model's rates; give them after the scenario
    #[arg(long, value_name = "TRAJ", num_args = 1..)]
    pub observed: Vec<PathBuf>,
    /// sampling interval of the observed files, for files without a time column
    #[arg(long, value_name = "T", requires = "observed")]
    pub dt: Option<f64>,
    /// the observed files' position column: its number (from 1) or its header name
    #[arg(long, value_name = "COL", requires = "observed")]
    pub position: Option<String>,
    /// the observed files' time column: its number (from 1) or its header name
    #[arg(long, value_name = "COL", requires = "observed")]
    pub time: Option<String>,
    /// the two cores of the observed trajectories, e.g. --cores=-1.3:-0.7,0.7:1.3 (default: as
    /// `observe` places them, around the two deepest minima of the observed U)
    #[arg(
        long,
        value_name = "LO:HI,LO:HI",
        allow_hyphen_values = true,
        requires = "observed"
    )]
    pub cores: Option<String>,
}

/// Options of `observe`.
#[derive(Debug, Args, Clone)]
pub struct ObserveOpts {
    /// trajectory files: text columns (comma or whitespace, `#` comments) or NumPy .npy;
    /// several files are several independent trajectories
    #[arg(required = true, value_name = "TRAJ")]
    pub files: Vec<PathBuf>,
    /// a scenario whose units the files are in (positions in its length unit, times in its
    /// time unit; the profile's energies in its energy unit); without one, reduced units (kT = 1)
    #[arg(long, value_name = "FILE.toml")]
    pub scenario: Option<PathBuf>,
    /// sampling interval, for files without a time column
    #[arg(long, value_name = "T")]
    pub dt: Option<f64>,
    /// the position column: its number (from 1) or its header name
    #[arg(long, value_name = "COL")]
    pub position: Option<String>,
    /// the time column: its number (from 1) or its header name
    #[arg(long, value_name = "COL")]
    pub time: Option<String>,
    /// the two cores (position intervals), e.g. --cores=-1.3:-0.7,0.7:1.3 (default: around the
    /// two deepest minima of the observed U)
    #[arg(long, value_name = "LO:HI,LO:HI", allow_hyphen_values = true)]
    pub cores: Option<String>,
    /// histogram bin width (default: Scott's rule)
    #[arg(long, value_name = "W")]
    pub bin_width: Option<f64>,
    /// also estimate D(x) by the Bayesian propagator method (Hummer 2005) at several lags,
    /// with the conditional-moment D(x) beside it
    #[arg(long)]
    pub diffusion: bool,
    /// lags of the D(x) analysis, in frames
    #[arg(
        long,
        value_name = "L,L,...",
        value_delimiter = ',',
        requires = "diffusion",
        default_value = "1,2,5,10"
    )]
    pub lags: Vec<usize>,
    /// bins of the D(x) analysis (default 30, between the 0.5% and 99.5% quantiles)
    #[arg(long, value_name = "N", requires = "diffusion")]
    pub d_bins: Option<usize>,
    /// also friction and memory from a velocity column (its number from 1 or its header name;
    /// velocities in length/time units): γ from the velocity autocorrelation (Green–Kubo, for a
    /// free particle) and the memory kernel by Volterra inversion with the observed mean force
    /// U′(x) of the free energy (in a well), with an exponential fit (γ, τ). Holds the positions,
    /// velocities and U′(x) in memory, 24 bytes per sample
    #[arg(long, value_name = "COL", conflicts_with = "friction")]
    pub velocity: Option<String>,
    /// the same analysis on velocities taken from the positions by central differences
    /// (x[n+1] − x[n−1])/(2Δt), with their bias stated; holds 24 bytes per sample in memory
    #[arg(long)]
    pub friction: bool,
    /// the particle's mass, in the scenario's mass unit, for --velocity/--friction (default: the
    /// scenario's particle.mass, else equipartition m = kT/⟨v²⟩)
    #[arg(long, value_name = "M", allow_negative_numbers = true)]
    pub mass: Option<f64>,
    /// the files are restrained (umbrella) windows held by springs K (the scenario's energy unit
    /// per length unit squared; one for all, or one per file): D at each window's mean position
    /// instead of the free energy and kinetics; each window is held in memory
    #[arg(
        long,
        value_name = "K,K,...",
        value_delimiter = ',',
        allow_negative_numbers = true
    )]
    pub spring: Vec<f64>,
    /// write the free energy as a profile table (x, U, sigma_U; with --diffusion also D,
    /// sigma_D) that scenarios read
    #[arg(long, value_name = "FILE.csv")]
    pub profile: Option<PathBuf>,
    /// also write a scenario that reads that table ([units] and [particle] from --scenario; with
    /// --velocity/--friction the observed mass, friction and memory time; with --diffusion the
    /// table's D replaces the diffusion or friction of [particle])
    #[arg(long, value_name = "FILE.toml", requires = "profile")]
    pub scenario_out: Option<PathBuf>,
    /// draw U(x) with its σ_U bars and the cores (with --diffusion also D(x)) as an SVG picture
    #[arg(long, value_name = "FILE.svg")]
    pub plot: Option<PathBuf>,
    /// seed of the bootstrap
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// bootstrap resamples for σ_U
    #[arg(long, value_name = "B", default_value_t = escapade::observe::DEFAULT_RESAMPLES)]
    pub resamples: usize,
    /// Print one JSON object on stdout instead of tables.
    #[arg(long)]
    pub json: bool,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Landscape: stationary points, reactant, barrier, product, target, frequencies, action.
    Survey {
        /// scenario file (TOML)
        file: PathBuf,
        /// draw U(x) with the special points marked as an SVG picture
        #[arg(long, value_name = "FILE.svg")]
        plot: Option<PathBuf>,
        #[command(flatten)]
        common: Common,
    },
    /// Landscape, regime diagnosis and every rate formula with the exact overdamped MFPT.
    Rate {
        /// scenario file (TOML)
        file: PathBuf,
        #[command(flatten)]
        common: Common,
    },
    /// Simulated escape: an ensemble of Langevin trajectories, with rate, interval and MFPT.
    Simulate {
        /// scenario file (TOML)
        file: PathBuf,
        /// draw the survival curve with the fitted exponential (brute force) as an SVG picture
        #[arg(long, value_name = "FILE.svg")]
        plot: Option<PathBuf>,
        #[command(flatten)]
        common: Common,
        #[command(flatten)]
        sim: SimOpts,
    },
    /// Theory and simulation side by side, with a verdict on which theories agree; with
    /// --observed, also your own trajectories' rate beside them.
    Compare {
        /// scenario file (TOML)
        file: PathBuf,
        #[command(flatten)]
        common: Common,
        #[command(flatten)]
        sim: SimOpts,
        #[command(flatten)]
        observed: ObservedRun,
    },
    /// Vary one scenario value over a range: every theory rate at each point, fits, plots.
    Scan {
        /// scenario file (TOML)
        file: PathBuf,
        /// the scenario key to vary, e.g. particle.friction, units.temperature, potential.tilt
        #[arg(long, value_name = "SECTION.KEY")]
        vary: String,
        /// first value
        #[arg(long, allow_negative_numbers = true)]
        from: f64,
        /// last value
        #[arg(long, allow_negative_numbers = true)]
        to: f64,
        /// number of points
        #[arg(long, default_value_t = 11)]
        points: usize,
        /// logarithmic spacing
        #[arg(long)]
        log: bool,
        /// also simulate every point (its own seed and step budget)
        #[arg(long)]
        simulate: bool,
        /// write the points as CSV to this file
        #[arg(long, value_name = "FILE")]
        csv: Option<PathBuf>,
        /// draw the scan as an SVG picture
        #[arg(long, value_name = "FILE.svg")]
        plot: Option<PathBuf>,
        #[command(flatten)]
        common: Common,
        /// worker threads for --simulate (default: all cores)
        #[arg(long, value_name = "N", default_value_t = 0)]
        threads: usize,
        /// show every rate, the regime and E_b/kT in the table (by default: the rates that hold)
        #[arg(long)]
        all_columns: bool,
    },
    /// Union record files of one run (shards or pieces) and report their statistics.
    Merge {
        /// record files
        #[arg(required = true)]
        files: Vec<PathBuf>,
        /// Print one JSON object on stdout instead of a table.
        #[arg(long)]
        json: bool,
        /// Also write the union as one record file.
        #[arg(long, value_name = "FILE")]
        output: Option<PathBuf>,
    },
    /// Your own trajectories of one coordinate: free energy U(x) with σ_U, and the rates between
    /// two cores with intervals (no model needed).
    Observe(ObserveOpts),
    /// `compare` on an embedded invented scenario where the friction regime matters.
    Demo {
        #[command(flatten)]
        common: Common,
        #[command(flatten)]
        sim: SimOpts,
    },
}
