//! How to simulate: the scenario's `[simulation]` section as typed settings. Names of dynamics,
//! schemes, start rules and methods are enums read once from the file (serde rejects any other
//! string with its line); ranges are checked by the scenario module.

use super::Dynamics;
use crate::units::quantity;
use serde::{Deserialize, Serialize};

/// The integrator asked for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Scheme {
    /// BAOAB splitting (underdamped)
    Baoab,
    /// BAOAB with an auxiliary variable for an exponential memory kernel (underdamped)
    BaoabMemory,
    /// Leimkuhler–Matthews (overdamped)
    LeimkuhlerMatthews,
    /// Euler–Maruyama (overdamped)
    EulerMaruyama,
}

impl Scheme {
    /// The name in scenario files and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Self::Baoab => "baoab",
            Self::BaoabMemory => "baoab-memory",
            Self::LeimkuhlerMatthews => "leimkuhler-matthews",
            Self::EulerMaruyama => "euler-maruyama",
        }
    }
}

/// Where trajectories start.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum StartRule {
    /// at the reactant minimum
    Minimum,
    /// drawn from the Boltzmann distribution of the reactant well
    Thermal,
}

pub use super::methods::MethodRequest;

/// The `[simulation]` section (range-checked by the scenario module).
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Settings {
    /// underdamped or overdamped (default: from the regime)
    pub dynamics: Option<Dynamics>,
    /// integrator (default: the dynamics' own)
    pub scheme: Option<Scheme>,
    /// number of trajectories
    pub trajectories: Option<u64>,
    /// time step in units.time
    #[serde(default, deserialize_with = "quantity::time")]
    pub dt: Option<f64>,
    /// censoring horizon in units.time
    #[serde(default, deserialize_with = "quantity::time")]
    pub max_time: Option<f64>,
    /// master seed
    pub seed: Option<u64>,
    /// where trajectories start (default: the minimum)
    pub start: Option<StartRule>,
    /// estimation method (default: auto)
    pub method: Option<MethodRequest>,
    /// step budget for method = "auto"
    pub budget_steps: Option<f64>,
    /// forward flux sampling: interface positions (units.length), the target last
    #[serde(default, deserialize_with = "quantity::length_list")]
    pub interfaces: Option<Vec<f64>>,
    /// forward flux sampling: trials per stage and replica
    pub trials: Option<u64>,
    /// forward flux sampling: independent replicas (for the interval)
    pub replicas: Option<u64>,
    /// reactive flux: the window for κ(t), in units.time
    #[serde(default, deserialize_with = "quantity::time")]
    pub flux_time: Option<f64>,
    /// also count well-to-well transitions (double wells)
    pub well_to_well: Option<bool>,
    /// well-to-well transitions expected over the whole count (sets the trajectory length)
    pub transitions: Option<u64>,
    /// independent long trajectories for the well-to-well count and periodic measurements
    pub long_trajectories: Option<u64>,
}
