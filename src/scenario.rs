//! The scenario file (TOML): reading, `--set` overrides, validation, and the reduction to a
//! [`Model`] in internal units (kT = 1; see [`crate::units`]).
//!
//! Every error names the file and the line (syntax and type errors) or the key (missing,
//! inconsistent or non-physical values). Overrides given as `section.key=value` are applied to the
//! parsed document before validation, so they are checked exactly like values in the file.
//! Dimensioned values may be strings with a unit ("5 /ps"), converted into the scenario's units
//! while the file is read ([`crate::units::read_quantity`]; the `[units]` section is read first).

use crate::potential::periodic::Periodic;
use crate::potential::{
    AnyPotential, Diffusion, Family, FitChoice, Formula, FormulaPotential, Potential, Table,
    TableOptions, smooth::Rule as SmoothRule, table::read_columns,
};
use crate::simulate::Settings;
use crate::system::System;
use crate::uncertainty::{MIN_DRAWS, UncertaintyOptions};
use crate::units::quantity::{self, with_scale};
use crate::units::{UnitError, UnitNames, UnitScale, UnitSystem};
use serde::Deserialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use thiserror::Error;

/// A scenario problem, naming the file and the line or key.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum ScenarioError {
    /// The file could not be read.
    #[error("{file}: cannot read: {message}")]
    Io {
        /// the file
        file: String,
        /// the OS message
        message: String,
    },
    /// A syntax or type error at a line.
    #[error("{file}: line {line}{key}: {message}")]
    Line {
        /// the file
        file: String,
        /// 1-based line
        line: usize,
        /// " (key a.b)" or empty
        key: String,
        /// what is wrong
        message: String,
    },
    /// A missing, inconsistent or non-physical value.
    #[error("{file}: {key}: {message}")]
    Key {
        /// the file (or "--set")
        file: String,
        /// dotted key
        key: String,
        /// what is wrong
        message: String,
    },
    /// A bad `--set` argument.
    #[error("--set {arg}: {message}")]
    Override {
        /// the argument as given
        arg: String,
        /// what is wrong
        message: String,
    },
}

/// Internal masses, frictions and diffusion coefficients must lie in this range: beyond it actions
/// and Boltzmann factors overflow double precision in intermediate steps.
pub const INTERNAL_RANGE: (f64, f64) = (1e-150, 1e150);

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
const MAX_DRAWS: u64 = 1_000_000;

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

/// One `--set section.key=value`.
#[derive(Debug, Clone, PartialEq)]
pub struct Override {
    /// path of keys
    pub path: Vec<String>,
    /// the TOML value
    pub value: toml::Value,
    /// the argument as given
    pub arg: String,
}

impl Override {
    /// Parses `section.key=value`; the value is read as TOML (a number, boolean, array, quoted
    /// string) and otherwise taken as a bare string.
    ///
    /// # Errors
    /// No `=`, or an empty key part.
    pub fn parse(arg: &str) -> Result<Self, ScenarioError> {
        let bad = |m: &str| ScenarioError::Override {
            arg: arg.to_string(),
            message: m.to_string(),
        };
        let (k, v) = arg
            .split_once('=')
            .ok_or_else(|| bad("expected section.key=value"))?;
        let path: Vec<String> = k.trim().split('.').map(|s| s.trim().to_string()).collect();
        if path.iter().any(String::is_empty) {
            return Err(bad("empty key name (expected section.key=value)"));
        }
        let v = v.trim();
        let value = format!("v = {v}")
            .parse::<toml::Table>()
            .ok()
            .and_then(|mut t| t.remove("v"))
            .unwrap_or_else(|| toml::Value::String(v.to_string()));
        Ok(Self {
            path,
            value,
            arg: arg.to_string(),
        })
    }
}

/// A validated scenario in internal units (energies in kT, lengths in units.length, times in
/// units.time, masses in kT·time²/length²).
#[derive(Debug, Clone)]
pub struct Model {
    /// the file the scenario came from (for messages)
    pub source: String,
    /// free text
    pub title: Option<String>,
    /// unit conversion
    pub units: UnitSystem,
    /// the physical system (potential, D, mass, friction, memory, period, start, target)
    pub system: System,
    /// a short description of the potential for reports
    pub potential_label: String,
    /// the `[simulation]` section, if any
    pub simulation: Option<Settings>,
    /// the `[uncertainty]` section (defaults when absent)
    pub uncertainty: UncertaintySection,
    /// true when an `[uncertainty]` section was given
    pub uncertainty_given: bool,
}

impl Model {
    /// The options of the `[uncertainty]` section (defaults where absent).
    pub fn uncertainty_options(&self) -> UncertaintyOptions {
        let u = &self.uncertainty;
        let d = UncertaintyOptions::default();
        UncertaintyOptions {
            draws: u.draws.map_or(d.draws, |n| n as usize),
            correlation_length: u.correlation_length,
            seed: u.seed.unwrap_or(d.seed),
        }
    }

    /// Reads, overrides and validates a scenario file.
    ///
    /// # Errors
    /// See [`ScenarioError`]: every message names the file and the line or key.
    pub fn load(path: &Path, overrides: &[Override]) -> Result<Self, ScenarioError> {
        let file = path.display().to_string();
        let bytes = std::fs::read(path).map_err(|e| ScenarioError::Io {
            file: file.clone(),
            message: e.to_string(),
        })?;
        let text = String::from_utf8(bytes).map_err(|e| {
            let line = e.as_bytes()[..e.utf8_error().valid_up_to()]
                .iter()
                .filter(|&&b| b == b'\n')
                .count()
                + 1;
            ScenarioError::Line {
                file: file.clone(),
                line,
                key: String::new(),
                message: "the file is not UTF-8 text".into(),
            }
        })?;
        let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
        Self::from_text(&text, &file, &base, overrides)
    }

    /// Validates scenario text; `base` is the folder that relative table paths start from.
    ///
    /// # Errors
    /// See [`ScenarioError`].
    pub fn from_text(
        text: &str,
        file: &str,
        base: &Path,
        overrides: &[Override],
    ) -> Result<Self, ScenarioError> {
        let overridden = overrides.iter().map(|o| o.path.join(".")).collect();
        let validator = Validator {
            file,
            base,
            overridden,
        };
        // unit strings are converted while reading, so the units (after every override) come first
        let scale = validator.scale(text, overrides)?;
        let sf = with_scale(scale, || -> Result<ScenarioFile, ScenarioError> {
            let sf: ScenarioFile = toml::from_str(text).map_err(|e| toml_error(text, file, &e))?;
            if overrides.is_empty() {
                return Ok(sf);
            }
            let mut doc: toml::Table = text.parse().map_err(|e| toml_error(text, file, &e))?;
            // check after each override, so an error names the one that caused it
            let mut last = None;
            for o in overrides {
                apply_override(&mut doc, o)?;
                let checked: ScenarioFile =
                    doc.clone().try_into().map_err(|e: toml::de::Error| {
                        ScenarioError::Override {
                            arg: o.arg.clone(),
                            message: e.message().trim().replace('\n', " "),
                        }
                    })?;
                last = Some(checked);
            }
            Ok(last.expect("at least one override"))
        })?;
        validator.build(sf)
    }
}

fn apply_override(doc: &mut toml::Table, o: &Override) -> Result<(), ScenarioError> {
    let mut t = doc;
    let (last, sections) = o.path.split_last().expect("non-empty path");
    for s in sections {
        let entry = t
            .entry(s.clone())
            .or_insert_with(|| toml::Value::Table(toml::Table::new()));
        t = match entry {
            toml::Value::Table(inner) => inner,
            _ => {
                return Err(ScenarioError::Override {
                    arg: o.arg.clone(),
                    message: format!("\"{s}\" is a value, not a section"),
                });
            }
        };
    }
    t.insert(last.clone(), o.value.clone());
    Ok(())
}

/// Turns a toml error into one line with the line number and, when the line holds `key = ...`,
/// the dotted key.
fn toml_error(text: &str, file: &str, e: &toml::de::Error) -> ScenarioError {
    let message = e.message().trim().replace('\n', " ");
    match e.span() {
        Some(span) => {
            let start = span.start.min(text.len());
            let line = text[..start].bytes().filter(|&b| b == b'\n').count() + 1;
            ScenarioError::Line {
                file: file.to_string(),
                line,
                key: key_at_line(text, line)
                    .map(|k| format!(" (key {k})"))
                    .unwrap_or_default(),
                message,
            }
        }
        None => ScenarioError::Key {
            file: file.to_string(),
            key: "(file)".into(),
            message,
        },
    }
}

fn key_at_line(text: &str, line: usize) -> Option<String> {
    let mut section = String::new();
    for (i, l) in text.lines().enumerate() {
        let t = l.trim();
        if t.starts_with('[') {
            section = t.trim_matches(|c| c == '[' || c == ']').trim().to_string();
        }
        if i + 1 == line {
            let (k, _) = t.split_once('=')?;
            let k = k.trim();
            return Some(if section.is_empty() {
                k.to_string()
            } else {
                format!("{section}.{k}")
            });
        }
    }
    None
}

struct Validator<'a> {
    file: &'a str,
    base: &'a Path,
    /// keys set by --set (their errors say so)
    overridden: Vec<String>,
}

impl Validator<'_> {
    fn err(&self, key: &str, message: impl Into<String>) -> ScenarioError {
        let from_set = self.overridden.iter().any(|k| k == key);
        ScenarioError::Key {
            file: if from_set {
                format!("{} (value from --set)", self.file)
            } else {
                self.file.to_string()
            },
            key: key.to_string(),
            message: message.into(),
        }
    }

    /// particle.viscosity and particle.radius (Stokes' law): both or neither, and instead of
    /// friction or diffusion.
    fn stokes(&self, p: &ParticleSection) -> Result<Option<(f64, f64)>, ScenarioError> {
        let eta = self.positive("particle.viscosity", p.viscosity)?;
        let r = self.positive("particle.radius", p.radius)?;
        let (eta, r) = match (eta, r) {
            (None, None) => return Ok(None),
            (Some(eta), Some(r)) => (eta, r),
            (Some(_), None) => {
                return Err(self.err(
                    "particle.radius",
                    "is required with particle.viscosity (Stokes' law D = kT/(6π η r))",
                ));
            }
            (None, Some(_)) => {
                return Err(self.err(
                    "particle.viscosity",
                    "is required with particle.radius (Stokes' law D = kT/(6π η r))",
                ));
            }
        };
        for (key, given) in [
            ("particle.friction", p.friction.is_some()),
            ("particle.diffusion", p.diffusion.is_some()),
            ("particle.diffusion_expr", p.diffusion_expr.is_some()),
        ] {
            if given {
                return Err(self.err(
                    "particle.viscosity",
                    format!(
                        "particle.viscosity and particle.radius give D by Stokes' law: give them or {key}, not both"
                    ),
                ));
            }
        }
        Ok(Some((eta, r)))
    }

    /// A `[units]` problem, under the key it concerns.
    fn unit_err(&self, e: &UnitError) -> ScenarioError {
        let key = match e {
            UnitError::Unknown { kind, .. } => format!("units.{kind}"),
            UnitError::Mixed { .. } => "units.mass".to_string(),
            _ => "units.temperature".to_string(),
        };
        self.err(&key, e.to_string())
    }

    /// The scale for unit strings: the file's `[units]` with every override applied.
    fn scale(&self, text: &str, overrides: &[Override]) -> Result<UnitScale, ScenarioError> {
        /// `[units]` alone, for its errors with their line
        #[derive(Deserialize)]
        struct UnitsOnly {
            #[serde(default)]
            #[allow(dead_code)] // read for its errors only
            units: UnitsSection,
        }
        toml::from_str::<UnitsOnly>(text).map_err(|e| toml_error(text, self.file, &e))?;
        let mut doc: toml::Table = text.parse().map_err(|e| toml_error(text, self.file, &e))?;
        let units = |doc: &toml::Table| match doc.get("units") {
            None => Ok(UnitsSection::default()),
            Some(v) => UnitsSection::deserialize(v.clone()),
        };
        let mut section = units(&doc).map_err(|e| toml_error(text, self.file, &e))?;
        for o in overrides {
            apply_override(&mut doc, o)?;
            section = units(&doc).map_err(|e| ScenarioError::Override {
                arg: o.arg.clone(),
                message: e.message().trim().replace('\n', " "),
            })?;
        }
        UnitScale::new(&section.names(), section.temperature).map_err(|e| self.unit_err(&e))
    }

    fn positive(&self, key: &str, v: Option<f64>) -> Result<Option<f64>, ScenarioError> {
        match v {
            Some(x) if !(x.is_finite() && x > 0.0) => {
                Err(self.err(key, format!("must be a positive number, got {x}")))
            }
            other => Ok(other),
        }
    }

    fn require(&self, key: &str, v: Option<f64>) -> Result<f64, ScenarioError> {
        self.positive(key, v)?
            .ok_or_else(|| self.err(key, "is required (a positive number)"))
    }

    fn build(&self, sf: ScenarioFile) -> Result<Model, ScenarioError> {
        // optional when a table's D column gives the diffusion (checked where D is chosen)
        let particle = sf.particle.clone().unwrap_or_default();
        let pot = sf
            .potential
            .clone()
            .ok_or_else(|| self.err("potential", "the [potential] section is required"))?;
        let mass = self.positive("particle.mass", particle.mass)?;
        let memory_time = self.positive("particle.memory_time", particle.memory_time)?;
        if memory_time.is_some() && particle.friction.is_none() {
            return Err(self.err(
                "particle.memory_time",
                "a memory kernel needs particle.friction (its strength) and particle.mass",
            ));
        }
        let friction = self.positive("particle.friction", particle.friction)?;
        let diffusion = self.positive("particle.diffusion", particle.diffusion)?;
        if friction.is_some() && diffusion.is_some() {
            return Err(self.err(
                "particle.diffusion",
                "give particle.friction or particle.diffusion, not both (D = kT/(m gamma))",
            ));
        }
        let stokes = self.stokes(&particle)?;
        if friction.is_some() && particle.diffusion_expr.is_some() {
            return Err(self.err(
                "particle.diffusion_expr",
                "a position-dependent D(x) goes with overdamped input: drop particle.friction",
            ));
        }
        if friction.is_some() && mass.is_none() {
            return Err(self.err(
                "particle.mass",
                "is required with particle.friction (D = kT/(m gamma))",
            ));
        }
        let units = UnitSystem::new(sf.units.names(), sf.units.temperature, mass.is_some())
            .map_err(|e| self.unit_err(&e))?;
        // Stokes' law with the Einstein relation (Stokes 1851, Einstein 1905): D = kT/(6πηr), with
        // kT in units.energy and η in units.energy·units.time/units.length³, so D is in
        // units.length²/units.time
        let (diffusion, d_key, d_keys) = match stokes {
            Some((eta, r)) => (
                Some(units.kt_in_energy_unit / (6.0 * std::f64::consts::PI * eta * r)),
                "particle.viscosity",
                "particle.viscosity and particle.radius",
            ),
            None => (diffusion, "particle.diffusion", "particle.diffusion"),
        };
        let mass_int = mass.and_then(|m| units.mass_to_internal(m));
        // Internal values far from 1 overflow the actions and exponents (sqrt(2 m E) for m ~ 1e308):
        // refuse them with a hint instead of reporting infinities.
        for (key, v) in [
            ("particle.mass", mass_int),
            ("particle.friction", friction),
            (d_key, diffusion),
        ] {
            if let Some(v) = v
                && !(INTERNAL_RANGE.0..=INTERNAL_RANGE.1).contains(&v)
            {
                return Err(self.err(
                    key,
                    format!(
                        "{v:e} in internal units (kT, the scenario's length and time) is outside [{:e}, {:e}]: choose units closer to the problem's scale",
                        INTERNAL_RANGE.0, INTERNAL_RANGE.1
                    ),
                ));
            }
        }
        let constants = pot.constants.clone().unwrap_or_default();
        for (k, v) in &constants {
            if !v.is_finite() {
                return Err(self.err(&format!("potential.constants.{k}"), "must be finite"));
            }
        }
        // the noise model of a table's rows (its correlation length) shapes its fit too
        let correlation_length = sf
            .uncertainty
            .as_ref()
            .and_then(|u| u.correlation_length)
            .filter(|c| c.is_finite() && *c >= 0.0);
        let (potential, label, table_d) =
            self.potential(&pot, &units, &constants, correlation_length)?;
        // constants nothing reads would be silently ignored (a family takes its own keys)
        if pot.constants.is_some() && pot.expr.is_none() && particle.diffusion_expr.is_none() {
            let what = match &pot.family {
                Some(f) => format!(
                    "the {f} family takes its parameters as [potential] keys (e.g. potential.barrier)"
                ),
                None => "a table potential has no formula".into(),
            };
            return Err(self.err(
                "potential.constants",
                format!(
                    "only potential.expr and particle.diffusion_expr use constants: {what}; drop [potential.constants]"
                ),
            ));
        }
        let (lo, hi) = potential.domain();
        let period = match (
            &potential,
            self.positive("potential.periodic", pot.periodic)?,
        ) {
            (AnyPotential::Family(Family::Washboard { .. }), Some(_)) => {
                return Err(self.err(
                    "potential.periodic",
                    "the washboard family is periodic already (potential.period): drop potential.periodic",
                ));
            }
            (AnyPotential::Family(Family::Washboard { period, .. }), None) => Some(*period),
            (AnyPotential::Family(_), Some(_)) => {
                return Err(self.err(
                    "potential.periodic",
                    "applies to expr and table potentials (the washboard family is periodic by itself)",
                ));
            }
            (_, Some(l)) => {
                // one whole period must lie inside the domain (a relative 1e-9 covers rounding
                // in a table's last x)
                if l > (hi - lo) * (1.0 + 1e-9) {
                    return Err(self.err(
                        "potential.periodic",
                        format!(
                            "the period {l} is longer than the domain [{lo}, {hi}]: one whole period must be given"
                        ),
                    ));
                }
                Some(l)
            }
            (_, None) => None,
        };
        // an expr or table with a period is read on [lo, lo + L] and extended over the window
        // [lo − L, lo + 2L] (tilt from the rise over one period)
        let (potential, label) = match (period, &potential) {
            (Some(l), AnyPotential::Formula(_) | AnyPotential::Table(_)) => {
                let w = Periodic::new(potential, lo, l.min(hi - lo))
                    .map_err(|e| self.err("potential.periodic", e.to_string()))?;
                (
                    AnyPotential::Periodic(Box::new(w)),
                    format!("{label}, periodic with L = {l}"),
                )
            }
            _ => (potential, label),
        };
        let (lo, hi) = potential.domain();
        let uncertainty_given = sf.uncertainty.is_some();
        let uncertainty = sf.uncertainty.clone().unwrap_or_default();
        self.positive(
            "uncertainty.correlation_length",
            uncertainty.correlation_length.filter(|&c| c != 0.0),
        )?;
        if matches!(uncertainty.draws, Some(n) if n > MAX_DRAWS) {
            return Err(self.err("uncertainty.draws", format!("must be at most {MAX_DRAWS}")));
        }
        if matches!(uncertainty.draws, Some(n) if n < MIN_DRAWS as u64) {
            return Err(self.err(
                "uncertainty.draws",
                format!(
                    "must be at least {} (below that the 95% percentiles are the extreme draws)",
                    MIN_DRAWS
                ),
            ));
        }
        if uncertainty_given && matches!(&potential, AnyPotential::Periodic(_)) {
            return Err(self.err(
                "uncertainty",
                "is not available for periodic profiles yet: drop [uncertainty] or potential.periodic",
            ));
        }
        if uncertainty_given
            && !matches!(&potential, AnyPotential::Table(t) if t.sigma_u().is_some())
        {
            return Err(self.err(
                "uncertainty",
                "needs a table potential with a sigma_U column (the profile's standard error)",
            ));
        }

        let diffusion_model = if let Some(src) = &particle.diffusion_expr {
            if diffusion.is_some() {
                return Err(self.err(
                    "particle.diffusion_expr",
                    "give particle.diffusion or particle.diffusion_expr, not both",
                ));
            }
            let f = Formula::parse(src, &constants)
                .map_err(|e| self.err("particle.diffusion_expr", e.to_string()))?;
            check_positive_on(&f, lo, hi).map_err(|m| self.err("particle.diffusion_expr", m))?;
            Diffusion::Formula(f)
        } else if let Some(d) = diffusion {
            if table_d.is_some() {
                return Err(self.err(d_key, format!("the table has a D column: drop {d_keys}")));
            }
            Diffusion::Constant(d)
        } else if let Some(spline) = table_d {
            Diffusion::Table(spline)
        } else if let (Some(g), Some(m)) = (friction, mass_int) {
            // Einstein relation, internal units (kT = 1)
            Diffusion::Constant(1.0 / (m * g))
        } else if sf.particle.is_none() {
            return Err(self.err(
                "particle",
                "the [particle] section is required (unless the table has a D column)",
            ));
        } else {
            return Err(self.err(
                "particle.friction",
                "give particle.friction (with mass), particle.diffusion, or particle.viscosity and particle.radius",
            ));
        };
        // a periodic profile's D(x) is read on its base period and repeated, like U'
        let diffusion_model = match (&potential, diffusion_model) {
            (AnyPotential::Periodic(w), d @ (Diffusion::Formula(_) | Diffusion::Table(_))) => {
                Diffusion::Periodic {
                    inner: Box::new(d),
                    x0: w.origin(),
                    period: w.period(),
                }
            }
            (_, d) => d,
        };
        // gamma from D when only D is given and a mass is known (at the barrier for D(x): decided later)
        let friction_int = friction.or_else(|| {
            let m = mass_int?;
            diffusion_model.constant().map(|d| 1.0 / (m * d))
        });

        let inside = |key: &str, v: Option<f64>| -> Result<Option<f64>, ScenarioError> {
            match v {
                Some(x) if !(x.is_finite() && x >= lo && x <= hi) => {
                    Err(self.err(key, format!("{x} lies outside the domain [{lo}, {hi}]")))
                }
                other => Ok(other),
            }
        };
        let start = inside("states.start", sf.states.start)?;
        let target = inside("states.target", sf.states.target)?;
        // a target on a wall is never reached: the wall reflects first
        if let Some(x) = target
            && (x == lo || x == hi)
        {
            return Err(self.err(
                "states.target",
                format!(
                    "{x} is a domain end, where the wall reflects every trajectory: put the target inside [{lo}, {hi}]"
                ),
            ));
        }
        // the washboard's reference well is the one at the origin; a periodic profile's is the
        // lowest point of its base period (the middle period of the analysis window, away from
        // the window's walls, whatever the tilt)
        let start = start.or(match &potential {
            AnyPotential::Family(Family::Washboard { .. }) => Some(0.0),
            AnyPotential::Periodic(w) => {
                let (x0, l) = (w.origin(), w.period());
                (0..2000)
                    .map(|i| x0 + l * f64::from(i) / 2000.0)
                    .min_by(|a, b| w.u(*a).total_cmp(&w.u(*b)))
            }
            _ => None,
        });
        if let Some(sim) = &sf.simulation {
            self.check_simulation(sim)?;
        }
        Ok(Model {
            source: self.file.to_string(),
            title: sf.title,
            system: System {
                potential,
                diffusion: diffusion_model,
                mass: mass_int,
                friction: friction_int,
                memory_time,
                period,
                start,
                target,
                temperature_k: units.temperature,
            },
            units,
            potential_label: label,
            simulation: sf.simulation,
            uncertainty,
            uncertainty_given,
        })
    }

    fn check_simulation(&self, s: &Settings) -> Result<(), ScenarioError> {
        self.positive("simulation.dt", s.dt)?;
        self.positive("simulation.max_time", s.max_time)?;
        self.positive("simulation.budget_steps", s.budget_steps)?;
        if s.trajectories == Some(0) {
            return Err(self.err("simulation.trajectories", "must be at least 1"));
        }
        if matches!(s.long_trajectories, Some(n) if n < 2) {
            return Err(self.err(
                "simulation.long_trajectories",
                "must be at least 2 (intervals come from their spread)",
            ));
        }
        if s.transitions == Some(0) {
            return Err(self.err("simulation.transitions", "must be at least 1"));
        }
        if s.trials == Some(0) {
            return Err(self.err("simulation.trials", "must be at least 1"));
        }
        if matches!(s.replicas, Some(r) if r < 2) {
            return Err(self.err(
                "simulation.replicas",
                "must be at least 2 (the interval comes from the spread of replicas)",
            ));
        }
        self.positive("simulation.flux_time", s.flux_time)?;
        if let Some(ifs) = &s.interfaces
            && (ifs.is_empty() || ifs.iter().any(|x| !x.is_finite()))
        {
            return Err(self.err(
                "simulation.interfaces",
                "must be a non-empty list of finite positions",
            ));
        }
        Ok(())
    }

    fn domain(&self, pot: &PotentialSection) -> Result<Option<(f64, f64)>, ScenarioError> {
        let Some(v) = pot.domain.as_deref() else {
            return Ok(None);
        };
        match *v {
            [a, b] if a.is_finite() && b.is_finite() && a < b => Ok(Some((a, b))),
            [a, b] => Err(self.err(
                "potential.domain",
                format!("must be [lo, hi] with finite lo < hi, got [{a}, {b}]"),
            )),
            _ => Err(self.err(
                "potential.domain",
                format!("must be [lo, hi], two numbers; got {} values", v.len()),
            )),
        }
    }

    /// The fit and significance options of a table potential (energies scaled to kT).
    fn table_options(
        &self,
        pot: &PotentialSection,
        cols: &crate::potential::table::Columns,
        scale: f64,
        correlation_length: Option<f64>,
    ) -> Result<TableOptions, ScenarioError> {
        let noise = self.positive("potential.noise", pot.noise)?;
        if noise.is_some() && cols.sigma_u.is_some() {
            return Err(self.err(
                "potential.noise",
                "the table has a sigma_U column: drop potential.noise",
            ));
        }
        let noisy = noise.is_some()
            || cols
                .sigma_u
                .as_ref()
                .is_some_and(|s| s.iter().any(|&v| v > 0.0));
        let fit = match pot.fit.as_deref() {
            None => None,
            Some("interpolate") => Some(FitChoice::Interpolate),
            Some(rule @ ("unbiased-risk" | "chi-square" | "cross-validation")) => {
                if !noisy {
                    return Err(self.err(
                        "potential.fit",
                        "smoothing needs the rows' standard errors: a sigma_U column or potential.noise",
                    ));
                }
                Some(FitChoice::Smooth(match rule {
                    "chi-square" => SmoothRule::ChiSquare,
                    "cross-validation" => SmoothRule::CrossValidation,
                    _ => SmoothRule::Risk {
                        correlation_length: correlation_length
                            .unwrap_or_else(|| crate::potential::table::median_spacing(&cols.x)),
                    },
                }))
            }
            Some(other) => {
                return Err(self.err(
                    "potential.fit",
                    format!(
                        "unknown fit {other:?} (unbiased-risk, chi-square, cross-validation, interpolate)"
                    ),
                ));
            }
        };
        let prominence = match pot.prominence {
            Some(p) if p.is_finite() && p >= 0.0 => Some(p * scale),
            Some(p) => {
                return Err(self.err(
                    "potential.prominence",
                    format!("must be a finite energy >= 0, got {p}"),
                ));
            }
            None => None,
        };
        Ok(TableOptions {
            noise: noise.map(|n| n * scale),
            fit,
            correlation_length,
            prominence,
        })
    }

    #[allow(clippy::type_complexity)] // (potential, label, optional D column) is used once
    fn potential(
        &self,
        pot: &PotentialSection,
        units: &UnitSystem,
        constants: &BTreeMap<String, f64>,
        correlation_length: Option<f64>,
    ) -> Result<(AnyPotential, String, Option<crate::potential::Spline>), ScenarioError> {
        let given = [
            pot.expr.is_some(),
            pot.table.is_some(),
            pot.family.is_some(),
        ]
        .iter()
        .filter(|&&b| b)
        .count();
        if given != 1 {
            return Err(self.err(
                "potential",
                format!("give exactly one of expr, table or family ({given} given)"),
            ));
        }
        let scale = 1.0 / units.kt_in_energy_unit;
        let family_keys: [(&str, Option<f64>); 6] = [
            ("barrier", pot.barrier),
            ("half_width", pot.half_width),
            ("width", pot.width),
            ("amplitude", pot.amplitude),
            ("period", pot.period),
            ("tilt", pot.tilt),
        ];
        let only = |allowed: &[&str], what: &str| -> Result<(), ScenarioError> {
            for (k, v) in family_keys {
                if v.is_some() && !allowed.contains(&k) {
                    return Err(self.err(
                        &format!("potential.{k}"),
                        format!("is not a parameter of {what}"),
                    ));
                }
            }
            Ok(())
        };
        let domain = self.domain(pot)?;
        if pot.table.is_none() {
            for (key, given) in [
                ("noise", pot.noise.is_some()),
                ("fit", pot.fit.is_some()),
                ("prominence", pot.prominence.is_some()),
            ] {
                if given {
                    return Err(self.err(
                        &format!("potential.{key}"),
                        "applies to table potentials only (a formula or family is exact)",
                    ));
                }
            }
        }
        if let Some(src) = &pot.expr {
            only(&[], "a formula potential (use potential.constants)")?;
            let f = Formula::parse(src, constants)
                .map_err(|e| self.err("potential.expr", e.to_string()))?;
            let (lo, hi) = domain
                .ok_or_else(|| self.err("potential.domain", "is required with potential.expr"))?;
            return Ok((
                AnyPotential::Formula(FormulaPotential::new(f, scale, (lo, hi))),
                format!("U(x) = {src}"),
                None,
            ));
        }
        if let Some(t) = &pot.table {
            only(&[], "a table potential")?;
            if pot.domain.is_some() {
                return Err(self.err(
                    "potential.domain",
                    "a table's domain is its x range: drop potential.domain",
                ));
            }
            let path: PathBuf = self.base.join(t);
            let shown = path.display().to_string();
            let bytes = std::fs::read(&path)
                .map_err(|e| self.err("potential.table", format!("cannot read {shown}: {e}")))?;
            let cols = read_columns(&bytes).map_err(|e| ScenarioError::Key {
                file: shown.clone(),
                key: "potential.table".into(),
                message: e.to_string(),
            })?;
            let opts = self.table_options(pot, &cols, scale, correlation_length)?;
            let table = Table::with_options(&cols, scale, opts);
            let d = table.diffusion().cloned();
            return Ok((
                AnyPotential::Table(table),
                format!("table {t} ({} rows)", cols.x.len()),
                d,
            ));
        }
        let name = pot.family.as_deref().unwrap_or_default();
        let fam = match name {
            "double-well" => {
                only(&["barrier", "half_width"], "the double-well family")?;
                let eb = self.require("potential.barrier", pot.barrier)? * scale;
                let a = self.require("potential.half_width", pot.half_width)?;
                Family::DoubleWell {
                    eb,
                    a,
                    domain: domain.unwrap_or((-3.0 * a, 3.0 * a)),
                }
            }
            "cubic" => {
                only(&["barrier", "width"], "the cubic family")?;
                let eb = self.require("potential.barrier", pot.barrier)? * scale;
                let w = self.require("potential.width", pot.width)?;
                let l = 1.5 * w;
                Family::Cubic {
                    eb,
                    l,
                    domain: domain.unwrap_or((-l, cubic_far_end(eb) * l)),
                }
            }
            "washboard" => {
                only(&["amplitude", "period", "tilt"], "the washboard family")?;
                let amp = self.require("potential.amplitude", pot.amplitude)? * scale;
                let period = self.require("potential.period", pot.period)?;
                let tilt = pot.tilt.unwrap_or(0.0);
                if !tilt.is_finite() {
                    return Err(self.err("potential.tilt", "must be finite"));
                }
                Family::Washboard {
                    amp,
                    period,
                    tilt: tilt * scale,
                    // walls at the barrier tops next to the well at 0, and a whole period on the
                    // downhill side (mirrored for a leftward tilt), where the product well is
                    domain: domain.unwrap_or(if tilt < 0.0 {
                        (-1.5 * period, 0.5 * period)
                    } else {
                        (-0.5 * period, 1.5 * period)
                    }),
                }
            }
            other => {
                return Err(self.err(
                    "potential.family",
                    format!("unknown family {other:?} (double-well, cubic, washboard)"),
                ));
            }
        };
        Ok((AnyPotential::Family(fam), format!("{name} family"), None))
    }
}

/// Far end (in units of L) of the default cubic domain: where U has dropped 12 kT below the
/// barrier top (2 kT past the default target), and at least s = 2.
fn cubic_far_end(eb: f64) -> f64 {
    // drop(s) = eb + 6.75 eb s^2 (s - 1) grows monotonically for s > 1
    let drop = |s: f64| eb + 6.75 * eb * s * s * (s - 1.0);
    let (mut lo, mut hi) = (1.0, 2.0);
    while drop(hi) < 12.0 + eb {
        hi *= 2.0;
    }
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        if drop(mid) < 12.0 + eb {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    hi.max(2.0)
}

/// D(x) must be finite and positive on a fine grid over the domain.
fn check_positive_on(f: &Formula, lo: f64, hi: f64) -> Result<(), String> {
    let n = 2000;
    for i in 0..=n {
        let x = lo + (hi - lo) * f64::from(i) / f64::from(n);
        let v = f.value(x);
        if !(v.is_finite() && v > 0.0) {
            return Err(format!(
                "D({x}) = {v}: D(x) must be finite and positive on the domain"
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn load(text: &str) -> Result<Model, ScenarioError> {
        Model::from_text(text, "s.toml", Path::new("."), &[])
    }

    const OK: &str = "[particle]\nmass = 1.0\nfriction = 2.0\n[potential]\nfamily = \"double-well\"\nbarrier = 5.0\nhalf_width = 1.0\n";

    #[test]
    fn loads_and_derives_diffusion() {
        let m = load(OK).unwrap();
        assert_eq!(m.system.diffusion.constant(), Some(0.5));
        assert_eq!(m.system.friction, Some(2.0));
    }

    #[test]
    fn errors_name_line_or_key() {
        let e = load("[particle]\nmass = \"a\"\n").unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("particle.mass"), "{e}");
        let e = load(&OK.replace("mass = 1.0", "mas = 1.0"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("line 2") && e.contains("mas"), "{e}");
        let e = load(&OK.replace("friction = 2.0", "friction = -2.0"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("particle.friction"), "{e}");
        let e = load(&format!("[units]\ntemperature = -3\n{OK}"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("units.temperature"), "{e}");
        let e = load(&OK.replace("barrier = 5.0\n", ""))
            .unwrap_err()
            .to_string();
        assert!(e.contains("potential.barrier"), "{e}");
    }

    #[test]
    fn overrides_apply_and_are_checked() {
        let o = [Override::parse("potential.barrier=8").unwrap()];
        let m = Model::from_text(OK, "s.toml", Path::new("."), &o).unwrap();
        assert!((m.system.potential.u(0.0) - 8.0).abs() < 1e-12);
        let o = [Override::parse("potential.family=cubic").unwrap()];
        let e = Model::from_text(OK, "s.toml", Path::new("."), &o).unwrap_err();
        assert!(e.to_string().contains("potential.half_width"), "{e}");
        let o = [Override::parse("particle.nope=1").unwrap()];
        let e = Model::from_text(OK, "s.toml", Path::new("."), &o).unwrap_err();
        assert!(e.to_string().contains("--set"), "{e}");
        assert!(Override::parse("novalue").is_err());
    }
}
