//! The scenario file as written: one serde struct per section (unknown keys rejected), with
//! dimensioned keys read through [`crate::units::quantity`].

use crate::simulate::Settings;
use crate::units::UnitNames;
use crate::units::quantity;
use serde::Deserialize;
use std::collections::BTreeMap;

/// `[units]`
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UnitsSection {
    /// energy unit
    #[serde(default = "kt")]
    pub energy: String,
    /// length unit
    #[serde(default = "one")]
    pub length: String,
    /// time unit
    #[serde(default = "one")]
    pub time: String,
    /// mass unit
    #[serde(default = "one")]
    pub mass: String,
    /// temperature in K
    #[serde(default, deserialize_with = "quantity::temperature")]
    pub temperature: Option<f64>,
}

fn kt() -> String {
    "kT".into()
}
fn one() -> String {
    "1".into()
}

impl UnitsSection {
    /// The unit names as given.
    pub fn names(&self) -> UnitNames {
        UnitNames {
            energy: self.energy.clone(),
            length: self.length.clone(),
            time: self.time.clone(),
            mass: self.mass.clone(),
        }
    }
}

impl Default for UnitsSection {
    fn default() -> Self {
        Self {
            energy: kt(),
            length: one(),
            time: one(),
            mass: one(),
            temperature: None,
        }
    }
}

/// `[particle]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ParticleSection {
    /// mass in units.mass
    #[serde(default, deserialize_with = "quantity::mass")]
    pub mass: Option<f64>,
    /// friction rate gamma per units.time
    #[serde(default, deserialize_with = "quantity::rate")]
    pub friction: Option<f64>,
    /// diffusion coefficient in length²/time
    #[serde(default, deserialize_with = "quantity::diffusion")]
    pub diffusion: Option<f64>,
    /// position-dependent D(x)
    pub diffusion_expr: Option<String>,
    /// memory time τ of an exponential friction kernel K(t) = (γ/τ) e^{−t/τ}, units.time
    #[serde(default, deserialize_with = "quantity::time")]
    pub memory_time: Option<f64>,
    /// solvent viscosity η for Stokes' law D = kT/(6πηr), in units.energy·units.time/units.length³
    #[serde(default, deserialize_with = "quantity::viscosity")]
    pub viscosity: Option<f64>,
    /// particle radius r for Stokes' law, units.length
    #[serde(default, deserialize_with = "quantity::length")]
    pub radius: Option<f64>,
}

/// `[potential]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PotentialSection {
    /// U(x) formula
    pub expr: Option<String>,
    /// profile file
    pub table: Option<String>,
    /// family name
    pub family: Option<String>,
    /// domain for expr and family: [lo, hi] (a list, so that a wrong length is an error naming
    /// the key rather than extra values dropped)
    #[serde(default, deserialize_with = "quantity::length_list")]
    pub domain: Option<Vec<f64>>,
    /// named constants usable in expr and diffusion_expr
    pub constants: Option<BTreeMap<String, f64>>,
    /// family: barrier height (double-well, cubic)
    #[serde(default, deserialize_with = "quantity::energy")]
    pub barrier: Option<f64>,
    /// double-well: half the distance between the minima
    #[serde(default, deserialize_with = "quantity::length")]
    pub half_width: Option<f64>,
    /// cubic: position of the barrier top
    #[serde(default, deserialize_with = "quantity::length")]
    pub width: Option<f64>,
    /// washboard: amplitude (the untilted barrier is twice this)
    #[serde(default, deserialize_with = "quantity::energy")]
    pub amplitude: Option<f64>,
    /// washboard: period
    #[serde(default, deserialize_with = "quantity::length")]
    pub period: Option<f64>,
    /// washboard: tilt force (energy per length)
    #[serde(default, deserialize_with = "quantity::force")]
    pub tilt: Option<f64>,
    /// expr or table: the period L of a periodic (possibly tilted) profile, U(x + L) = U(x) − F L
    #[serde(default, deserialize_with = "quantity::length")]
    pub periodic: Option<f64>,
    /// table: a uniform standard error of U (energy unit) for a table without a sigma_U column
    #[serde(default, deserialize_with = "quantity::energy")]
    pub noise: Option<f64>,
    /// table: "chi-square" | "cross-validation" (smoothing spline) | "interpolate"
    pub fit: Option<String>,
    /// table: the energy difference below which a minimum–maximum pair is taken for noise
    #[serde(default, deserialize_with = "quantity::energy")]
    pub prominence: Option<f64>,
}

/// Most perturbed profiles accepted (each is a full re-analysis; a million already takes hours).
pub(super) const MAX_DRAWS: u64 = 1_000_000;

/// `[uncertainty]`: how a table's sigma_U column is propagated into the rates
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UncertaintySection {
    /// correlation length of the profile noise (units.length; default: the table spacing)
    #[serde(default, deserialize_with = "quantity::length")]
    pub correlation_length: Option<f64>,
    /// number of perturbed profiles
    pub draws: Option<u64>,
    /// seed of the draws
    pub seed: Option<u64>,
}

/// `[states]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StatesSection {
    /// the reactant minimum is the one nearest this point
    #[serde(default, deserialize_with = "quantity::length")]
    pub start: Option<f64>,
    /// the absorbing point
    #[serde(default, deserialize_with = "quantity::length")]
    pub target: Option<f64>,
}

/// The file as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioFile {
    /// free text
    pub title: Option<String>,
    /// `[units]`
    #[serde(default)]
    pub units: UnitsSection,
    /// `[particle]`
    pub particle: Option<ParticleSection>,
    /// `[potential]`
    pub potential: Option<PotentialSection>,
    /// `[states]`
    #[serde(default)]
    pub states: StatesSection,
    /// `[simulation]`
    pub simulation: Option<Settings>,
    /// `[uncertainty]`
    pub uncertainty: Option<UncertaintySection>,
}
