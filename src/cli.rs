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
}

/// Options every command accepts.
#[derive(Debug, Args, Clone)]
pub struct Common {
    /// Print one JSON object on stdout instead of tables.
    #[arg(long)]
    pub json: bool,
    /// No progress or notes on stderr.
    #[arg(long, short)]
    pub quiet: bool,
    /// Override one scenario value, e.g. --set particle.friction=3 (repeatable).
    #[arg(long = "set", value_name = "SECTION.KEY=VALUE")]
    pub set: Vec<String>,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Landscape: stationary points, reactant, barrier, product, target, frequencies, action.
    Survey {
        /// scenario file (TOML)
        file: PathBuf,
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
    /// The analytic report of an embedded example scenario.
    Demo {
        #[command(flatten)]
        common: Common,
    },
}
