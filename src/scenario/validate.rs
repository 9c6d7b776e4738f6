//! Checks across sections and the reduction of a [`ScenarioFile`] to a [`Model`] in internal
//! units; every error names the file and the key.

use super::file::{MAX_DRAWS, ParticleSection, ScenarioFile, UncertaintySection, UnitsSection};
use super::potential::check_positive_on;
use super::{INTERNAL_RANGE, Model, Override, ScenarioError, apply_override, toml_error};
use crate::potential::periodic::Periodic;
use crate::potential::{AnyPotential, Diffusion, Family, Formula, Potential};
use crate::simulate::Settings;
use crate::system::System;
use crate::uncertainty::{MIN_DRAWS, UncertaintyOptions};
use crate::units::{UnitError, UnitScale, UnitSystem};
use serde::Deserialize;
use std::path::Path;

/// The propagation settings of an `[uncertainty]` section (defaults where absent).
fn uncertainty_options(u: &UncertaintySection) -> UncertaintyOptions {
    let d = UncertaintyOptions::default();
    UncertaintyOptions {
        draws: u.draws.map_or(d.draws, |n| n as usize),
        correlation_length: u.correlation_length,
        seed: u.seed.unwrap_or(d.seed),
    }
}

/// What `[particle]` (with `[units]`) gives, in internal units.
struct ParticleValues {
    particle: ParticleSection,
    units: UnitSystem,
    mass: Option<f64>,
    friction: Option<f64>,
    memory_time: Option<f64>,
    /// a constant D, given or from Stokes' law
    diffusion: Option<f64>,
    /// the key(s) that gave that D (for messages)
    d_key: &'static str,
    d_keys: &'static str,
}

/// What `[potential]` gives.
struct LandscapeValues {
    potential: AnyPotential,
    label: String,
    /// a table's D column
    table_d: Option<crate::potential::Spline>,
    period: Option<f64>,
    constants: std::collections::BTreeMap<String, f64>,
}

pub(super) struct Validator<'a> {
    pub(super) file: &'a str,
    pub(super) base: &'a Path,
    /// keys set by --set (their errors say so)
    pub(super) overridden: Vec<String>,
}

impl<'a> Validator<'a> {
    /// A validator for `file`, remembering which keys `--set` gave.
    pub(super) fn new(file: &'a str, base: &'a Path, overrides: &[super::Override]) -> Self {
        Self {
            file,
            base,
            overridden: overrides.iter().map(|o| o.path.join(".")).collect(),
        }
    }

    pub(super) fn err(&self, key: &str, message: impl Into<String>) -> ScenarioError {
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
    pub(super) fn stokes(&self, p: &ParticleSection) -> Result<Option<(f64, f64)>, ScenarioError> {
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
    pub(super) fn unit_err(&self, e: &UnitError) -> ScenarioError {
        let key = match e {
            UnitError::Unknown { kind, .. } => format!("units.{kind}"),
            UnitError::Mixed { .. } => "units.mass".to_string(),
            _ => "units.temperature".to_string(),
        };
        self.err(&key, e.to_string())
    }

    /// The scale for unit strings: the file's `[units]` with every override applied.
    pub(super) fn scale(
        &self,
        text: &str,
        overrides: &[Override],
    ) -> Result<UnitScale, ScenarioError> {
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

    pub(super) fn positive(&self, key: &str, v: Option<f64>) -> Result<Option<f64>, ScenarioError> {
        match v {
            Some(x) if !(x.is_finite() && x > 0.0) => {
                Err(self.err(key, format!("must be a positive number, got {x}")))
            }
            other => Ok(other),
        }
    }

    pub(super) fn require(&self, key: &str, v: Option<f64>) -> Result<f64, ScenarioError> {
        self.positive(key, v)?
            .ok_or_else(|| self.err(key, "is required (a positive number)"))
    }

    pub(super) fn build(&self, sf: ScenarioFile) -> Result<Model, ScenarioError> {
        let pv = self.particle(&sf)?;
        let land = self.landscape(&sf, &pv)?;
        let (uncertainty, uncertainty_given) = self.uncertainty(&sf, &land.potential)?;
        let (diffusion, friction) = self.diffusion(&sf, &pv, &land)?;
        let (start, target) = self.states(&sf, &land.potential)?;
        if let Some(sim) = &sf.simulation {
            self.check_simulation(sim)?;
        }
        Ok(Model {
            source: self.file.to_string(),
            title: sf.title,
            system: System {
                potential: land.potential,
                diffusion,
                mass: pv.mass,
                friction,
                memory_time: pv.memory_time,
                period: land.period,
                start,
                target,
                temperature_k: pv.units.temperature,
            },
            units: pv.units,
            potential_label: land.label,
            simulation: sf.simulation,
            uncertainty: uncertainty_options(&uncertainty),
            uncertainty_given,
        })
    }

    /// `[particle]` and `[units]`: mass, friction, memory time, a constant D (given or from
    /// Stokes' law), and the unit system they fix.
    fn particle(&self, sf: &ScenarioFile) -> Result<ParticleValues, ScenarioError> {
        // optional when a table's D column gives the diffusion (checked where D is chosen)
        let particle = sf.particle.clone().unwrap_or_default();
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
        Ok(ParticleValues {
            particle,
            mass: mass_int,
            friction,
            memory_time,
            diffusion,
            d_key,
            d_keys,
            units,
        })
    }

    /// `[potential]`: the potential with its label, a table's D column, and the period (the
    /// washboard's, or potential.periodic, which extends an expr or table periodically).
    fn landscape(
        &self,
        sf: &ScenarioFile,
        pv: &ParticleValues,
    ) -> Result<LandscapeValues, ScenarioError> {
        let (particle, units) = (&pv.particle, &pv.units);
        let pot = sf
            .potential
            .clone()
            .ok_or_else(|| self.err("potential", "the [potential] section is required"))?;
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
            self.potential(&pot, units, &constants, correlation_length)?;
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
        Ok(LandscapeValues {
            potential,
            label,
            table_d,
            period,
            constants,
        })
    }

    /// `[uncertainty]`: its settings (defaults when absent) and whether it was given.
    fn uncertainty(
        &self,
        sf: &ScenarioFile,
        potential: &AnyPotential,
    ) -> Result<(UncertaintySection, bool), ScenarioError> {
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
        if uncertainty_given && matches!(potential, AnyPotential::Periodic(_)) {
            return Err(self.err(
                "uncertainty",
                "is not available for periodic profiles yet: drop [uncertainty] or potential.periodic",
            ));
        }
        if uncertainty_given
            && !matches!(potential, AnyPotential::Table(t) if t.sigma_u().is_some() || t.sigma_d().is_some())
        {
            return Err(self.err(
                "uncertainty",
                "needs a table potential with a sigma_U column (the profile's standard error) or a sigma_D column",
            ));
        }
        Ok((uncertainty, uncertainty_given))
    }

    /// D(x) (a formula, a constant, a table column, or kT/(mγ)) and γ where it follows from D.
    fn diffusion(
        &self,
        sf: &ScenarioFile,
        pv: &ParticleValues,
        land: &LandscapeValues,
    ) -> Result<(Diffusion, Option<f64>), ScenarioError> {
        let (particle, potential) = (&pv.particle, &land.potential);
        let (diffusion, friction, mass_int) = (pv.diffusion, pv.friction, pv.mass);
        let (d_key, d_keys, constants) = (pv.d_key, pv.d_keys, &land.constants);
        let (lo, hi) = potential.domain();
        let diffusion_model = if let Some(src) = &particle.diffusion_expr {
            if diffusion.is_some() {
                return Err(self.err(
                    "particle.diffusion_expr",
                    "give particle.diffusion or particle.diffusion_expr, not both",
                ));
            }
            let f = Formula::parse(src, constants)
                .map_err(|e| self.err("particle.diffusion_expr", e.to_string()))?;
            check_positive_on(&f, lo, hi).map_err(|m| self.err("particle.diffusion_expr", m))?;
            Diffusion::Formula(f)
        } else if let Some(d) = diffusion {
            if land.table_d.is_some() {
                return Err(self.err(d_key, format!("the table has a D column: drop {d_keys}")));
            }
            Diffusion::Constant(d)
        } else if let Some(spline) = &land.table_d {
            Diffusion::Table(spline.clone())
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
        let diffusion_model = match (potential, diffusion_model) {
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
        Ok((diffusion_model, friction_int))
    }

    /// `[states]`: start and target inside the domain (the start defaults to the reference well
    /// of a periodic landscape).
    fn states(
        &self,
        sf: &ScenarioFile,
        potential: &AnyPotential,
    ) -> Result<(Option<f64>, Option<f64>), ScenarioError> {
        let (lo, hi) = potential.domain();
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
        let start = start.or(match potential {
            AnyPotential::Family(Family::Washboard { .. }) => Some(0.0),
            AnyPotential::Periodic(w) => {
                let (x0, l) = (w.origin(), w.period());
                (0..2000)
                    .map(|i| x0 + l * f64::from(i) / 2000.0)
                    .min_by(|a, b| w.u(*a).total_cmp(&w.u(*b)))
            }
            _ => None,
        });
        Ok((start, target))
    }

    pub(super) fn check_simulation(&self, s: &Settings) -> Result<(), ScenarioError> {
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
}
