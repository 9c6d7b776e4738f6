//! Scans: one scenario value varied over a range, with every theory rate (and optionally a
//! simulated rate) at each point, and the fits that answer the usual questions:
//! - a temperature scan (`units.temperature`) fits ln k = ln A − E_a/(k_B T) (Arrhenius) for each
//!   rate. For Kramers-type rates the apparent E_a differs from E_b because the prefactor depends on
//!   T through γ and D (and E_b/kT itself through the unit conversion);
//! - a force scan (`potential.tilt`) fits ln k = ln k_0 + F x‡/kT (Bell 1978), giving the
//!   distance x‡ to the barrier;
//! - a friction scan (`particle.friction` or `particle.diffusion`) shows the turnover.
//!
//! Each point's simulation has its own seed derived from the master seed and the point index, and
//! its own step budget, so points are independent and reproducible. A stop request (Ctrl-C) ends
//! the simulations: the point being simulated and every later one are marked interrupted with no
//! simulated values (a partial ensemble is not a result), while the theory is still given for all.

use crate::fit::{self, Line};
use crate::model::Model;
use crate::simulate::session::{self, SessionError, SessionOptions};
use crate::simulate::{Plan, SimError};
use crate::theory::{self, Rates};
use crate::units::K_B;
use serde::Serialize;
use std::sync::atomic::{AtomicBool, Ordering};
use thiserror::Error;

/// Scan problems.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum ScanError {
    /// Bad range or key.
    #[error("{0}")]
    Spec(String),
    /// The study at some point could not be made (the scenario file's own error, one line).
    #[error(transparent)]
    Study(Box<dyn std::error::Error + Send + Sync>),
    /// Landscape or theory at some point.
    #[error("{file}: {key} = {value}: {message}")]
    Point {
        /// scenario file
        file: String,
        /// varied key
        key: String,
        /// value there
        value: f64,
        /// what went wrong
        message: String,
    },
}

/// Most points a scan may have: each point is a whole analysis (and a simulation with
/// `--simulate`), so more is a typing mistake rather than a plan (and 1e14 points would not fit
/// in memory).
pub const MAX_POINTS: usize = 10_000;

/// What is varied.
#[derive(Debug, Clone, PartialEq)]
pub struct Spec {
    /// dotted scenario key
    pub key: String,
    /// first value
    pub from: f64,
    /// last value
    pub to: f64,
    /// number of points (≥ 2)
    pub points: usize,
    /// logarithmic spacing
    pub log: bool,
}

impl Spec {
    /// The values of the scan.
    ///
    /// # Errors
    /// Fewer than 2 or more than [`MAX_POINTS`] points, non-finite ends, or a log scan through
    /// zero.
    pub fn values(&self) -> Result<Vec<f64>, ScanError> {
        let (a, b, n) = (self.from, self.to, self.points);
        if n > MAX_POINTS {
            return Err(ScanError::Spec(format!(
                "--points {n}: at most {MAX_POINTS} points"
            )));
        }
        if n < 2 || !a.is_finite() || !b.is_finite() {
            return Err(ScanError::Spec(format!(
                "--from/--to/--points: need finite ends and at least 2 points (got {a}, {b}, {n})"
            )));
        }
        if self.log && (a <= 0.0 || b <= 0.0) {
            return Err(ScanError::Spec(format!(
                "--log needs positive ends (got {a}, {b})"
            )));
        }
        Ok((0..n)
            .map(|i| {
                let f = i as f64 / (n - 1) as f64;
                // the ends exactly as given (no rounding through exp/ln)
                if i == 0 {
                    a
                } else if i == n - 1 {
                    b
                } else if self.log {
                    (a.ln() + f * (b.ln() - a.ln())).exp()
                } else {
                    a + f * (b - a)
                }
            })
            .collect())
    }
}

/// The kind of scan, by key.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Kind {
    /// friction or diffusion coefficient
    Friction,
    /// temperature
    Temperature,
    /// tilt force
    Force,
    /// anything else
    Other,
}

impl Kind {
    fn of(key: &str) -> Self {
        match key {
            "particle.friction" | "particle.diffusion" => Self::Friction,
            "units.temperature" => Self::Temperature,
            "potential.tilt" => Self::Force,
            _ => Self::Other,
        }
    }
}

/// Drift, effective diffusion and hopping rates of a periodic landscape at one point.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct PeriodicPoint {
    /// drift velocity (length/time)
    pub drift: f64,
    /// its 95% interval (simulation only)
    pub drift_ci95: Option<[f64; 2]>,
    /// effective diffusion coefficient (length²/time)
    pub effective_diffusion: Option<f64>,
    /// its 95% interval (simulation only)
    pub effective_diffusion_ci95: Option<[f64; 2]>,
    /// forward hopping rate (per time unit)
    pub hop_forward: Option<f64>,
    /// backward hopping rate
    pub hop_backward: Option<f64>,
}

impl PeriodicPoint {
    /// The exact overdamped values of a periodic analysis.
    fn theory(p: &crate::theory::periodic::PeriodicTheory) -> Self {
        Self {
            drift: p.drift,
            drift_ci95: None,
            effective_diffusion: p.effective_diffusion,
            effective_diffusion_ci95: None,
            hop_forward: p.hopping.as_ref().map(|h| h.forward),
            hop_backward: p.hopping.as_ref().map(|h| h.backward),
        }
    }
}

/// Whether a point was simulated (with `--simulate`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SimStatus {
    /// simulated to the end
    Complete,
    /// stopped (Ctrl-C) before its simulation finished, or not started after a stop
    Interrupted,
    /// nothing to simulate (the running state past the critical tilt)
    NotSimulated,
}

impl SimStatus {
    /// The name as in the JSON and CSV output.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Complete => "complete",
            Self::Interrupted => "interrupted",
            Self::NotSimulated => "not-simulated",
        }
    }
}

/// A simulated rate at one point.
#[derive(Debug, Clone, Serialize)]
pub struct SimPoint {
    /// method used
    pub method: &'static str,
    /// escape rate (per time unit)
    pub rate: f64,
    /// 95% interval
    pub rate_ci95: [f64; 2],
    /// well-to-well rate from counted transitions (simulation.well_to_well = true)
    pub well_to_well: Option<f64>,
    /// its 95% interval
    pub well_to_well_ci95: Option<[f64; 2]>,
    /// periodic landscapes: simulated drift, diffusion and hopping
    pub periodic: Option<PeriodicPoint>,
    /// steps spent
    pub total_steps: u64,
    /// seed used
    pub seed: u64,
}

/// One point of a scan.
#[derive(Debug, Clone, Serialize)]
pub struct Point {
    /// the varied value
    pub value: f64,
    /// regime name
    pub regime: &'static str,
    /// γ/ω_b
    pub gamma_over_omega_barrier: Option<f64>,
    /// δ
    pub delta: Option<f64>,
    /// E_b/kT
    #[serde(rename = "barrier_height_kT")]
    pub barrier_height_kt: f64,
    /// every theory rate (per time unit)
    pub rates: Rates,
    /// periodic landscapes: exact overdamped drift, effective diffusion and hopping rates
    pub periodic: Option<PeriodicPoint>,
    /// 95% intervals of the rates from the profile's sigma_U (with an `[uncertainty]` section)
    pub uncertainty: Option<Vec<crate::uncertainty::Interval>>,
    /// the simulated rate, with --simulate (null when interrupted)
    pub simulation: Option<SimPoint>,
    /// keys of the rates that hold at this point (`theory::RegimeReport::trusted`); tables and
    /// pictures mark the others
    #[serde(skip)]
    pub holds: Vec<theory::RateKey>,
    /// with --simulate: whether this point's simulation finished
    pub simulation_status: Option<SimStatus>,
}

/// A fit over the scan for one rate.
#[derive(Debug, Clone, Serialize)]
pub struct FitOut {
    /// which rate ("simulation" for the simulated one)
    pub rate: String,
    /// Arrhenius: apparent activation energy (scenario energy unit); force: distance x‡ (length)
    pub value: f64,
    /// its 95% interval
    pub value_ci95: [f64; 2],
    /// Arrhenius prefactor A or zero-force rate k_0 (per time unit)
    pub prefactor: f64,
    /// its 95% interval
    pub prefactor_ci95: [f64; 2],
    /// the line in (x, ln k)
    pub line: Line,
}

/// A whole scan.
#[derive(Debug, Clone, Serialize)]
pub struct ScanReport {
    /// varied key
    pub key: String,
    /// kind of scan
    pub kind: Kind,
    /// unit names of the scenario (at the first point)
    pub units: crate::units::UnitNames,
    /// points
    pub points: Vec<Point>,
    /// Arrhenius or force fits
    pub fits: Vec<FitOut>,
    /// notes
    pub notes: Vec<String>,
    /// stopped by the user before every simulation finished
    pub interrupted: bool,
    /// action I_b at the first point (for regime bands of a friction scan), energy·time
    #[serde(skip)]
    pub action_first: Option<f64>,
    /// ω_b at the first point
    #[serde(skip)]
    pub omega_barrier_first: Option<f64>,
    /// the values were spaced logarithmically (--log): the picture's x axis is logarithmic too
    #[serde(skip)]
    pub log: bool,
}

/// Where a scan's points come from: the study with the scanned key set to a value. The scenario
/// module gives one for a scenario file and its `--set` overrides; the scan never reads files.
pub trait Variants: Sync {
    /// The study with `key` = `value`, and the simulation's master seed set to `seed` when given.
    ///
    /// # Errors
    /// [`ScanError::Study`] with the source's own one-line message.
    fn at(&self, key: &str, value: f64, seed: Option<u64>) -> Result<Model, ScanError>;
    /// The source named in messages (the scenario file).
    fn source(&self) -> String;
}

fn point_theory(
    src: &dyn Variants,
    key: &str,
    v: f64,
    seed: Option<u64>,
) -> Result<(Model, theory::Analysis), ScanError> {
    let m = src.at(key, v, seed)?;
    let t = theory::analyse_or_running(&m.system).map_err(|e| ScanError::Point {
        file: src.source(),
        key: key.to_string(),
        value: v,
        message: format!("{}: {e}", e.key()),
    })?;
    Ok((m, t))
}

/// What a scan carries from point to point: where it is read from, the first point's facts, the
/// notes so far and whether a stop came.
struct Scan<'a> {
    src: &'a dyn Variants,
    spec: &'a Spec,
    simulate: bool,
    threads: usize,
    stop: &'a AtomicBool,
    /// unit names, kT in the energy unit, action and ω_b at the first point
    first: Option<(crate::units::UnitNames, f64, Option<f64>, Option<f64>)>,
    notes: Vec<String>,
    interrupted: bool,
}

/// Runs the scan over the studies `src` gives; with `simulate`, every point is also
/// simulated (method auto, its own seed, `threads` threads).
///
/// # Errors
/// A bad spec, a scenario error at some point (naming it), or a simulation set-up error.
pub fn run(
    src: &dyn Variants,
    spec: &Spec,
    simulate: bool,
    threads: usize,
    stop: &AtomicBool,
) -> Result<ScanReport, ScanError> {
    let values = spec.values()?;
    let mut scan = Scan {
        src,
        spec,
        simulate,
        threads,
        stop,
        first: None,
        notes: Vec::new(),
        interrupted: false,
    };
    let mut points = Vec::with_capacity(values.len());
    for (i, &v) in values.iter().enumerate() {
        points.push(scan.point(i, v)?);
    }
    Ok(scan.finish(points))
}

impl Scan<'_> {
    /// The theory at point `i` (value `v`) and, with `--simulate`, its simulation.
    fn point(&mut self, i: usize, v: f64) -> Result<Point, ScanError> {
        let (m, t) = match point_theory(self.src, &self.spec.key, v, None)? {
            (m, theory::Analysis::Full(t)) => (m, *t),
            (m, theory::Analysis::Running(p)) => return Ok(self.running_point(&m, v, &p)),
        };
        if self.first.is_none() {
            self.first = Some((
                m.units.names.clone(),
                m.units.kt_in_energy_unit,
                t.landscape.action,
                t.landscape.omega_barrier,
            ));
        }
        let (simulation, simulation_status) = self.simulation(&m, i, v)?;
        Ok(Point {
            value: v,
            regime: t.regime.name.as_str(),
            gamma_over_omega_barrier: t.regime.gamma_over_omega_barrier,
            delta: t.regime.delta,
            barrier_height_kt: t.landscape.barrier_height,
            rates: t.rates,
            periodic: t.periodic.as_ref().map(PeriodicPoint::theory),
            uncertainty: self.uncertainty(&m, v)?,
            simulation,
            holds: t.regime.trusted.clone(),
            simulation_status,
        })
    }

    /// Past the critical tilt: no well and no rate, only the sliding particle's drift.
    fn running_point(
        &mut self,
        m: &Model,
        v: f64,
        p: &crate::theory::periodic::PeriodicTheory,
    ) -> Point {
        if self.first.is_none() {
            self.first = Some((m.units.names.clone(), m.units.kt_in_energy_unit, None, None));
        }
        self.notes.push(format!(
            "{} = {v}: running state (past the critical tilt): no rates, drift and D_eff only{}",
            self.spec.key,
            if self.simulate { "; not simulated" } else { "" }
        ));
        Point {
            value: v,
            regime: "running",
            gamma_over_omega_barrier: None,
            delta: None,
            barrier_height_kt: 0.0,
            rates: Rates::default(),
            periodic: Some(PeriodicPoint::theory(p)),
            uncertainty: None,
            simulation: None,
            holds: Vec::new(),
            simulation_status: self.simulate.then_some(SimStatus::NotSimulated),
        }
    }

    /// The simulation of point `i` with `--simulate` (none after a stop).
    fn simulation(
        &mut self,
        m: &Model,
        i: usize,
        v: f64,
    ) -> Result<(Option<SimPoint>, Option<SimStatus>), ScanError> {
        if !self.simulate {
            return Ok((None, None));
        }
        if self.interrupted || self.stop.load(Ordering::Relaxed) {
            self.interrupted = true;
            return Ok((None, Some(SimStatus::Interrupted)));
        }
        let master = m.simulation.as_ref().and_then(|s| s.seed).unwrap_or(1);
        let (src, spec) = (self.src, self.spec);
        let (threads, stop) = (self.threads, self.stop);
        Ok(
            match simulate_point(src, spec, i, v, master, threads, stop, &mut self.notes)? {
                Some(p) => (Some(p), Some(SimStatus::Complete)),
                None => {
                    self.interrupted = true;
                    (None, Some(SimStatus::Interrupted))
                }
            },
        )
    }

    /// The rates' intervals from the profile's sigma_U (with an `[uncertainty]` section).
    fn uncertainty(
        &self,
        m: &Model,
        v: f64,
    ) -> Result<Option<Vec<crate::uncertainty::Interval>>, ScanError> {
        if !m.uncertainty_given {
            return Ok(None);
        }
        let opts = m.uncertainty_options();
        Ok(crate::uncertainty::propagate(&m.system, &opts)
            .map_err(|e| ScanError::Point {
                file: self.src.source(),
                key: self.spec.key.clone(),
                value: v,
                message: format!("{}: {e}", e.key()),
            })?
            .map(|u| u.rates))
    }

    /// The report: notes on interrupted points and the fits of the scan's kind.
    fn finish(self, points: Vec<Point>) -> ScanReport {
        let kind = Kind::of(&self.spec.key);
        let (units, kt_unit, action_first, omega_first) = self.first.expect("at least two points");
        let mut notes = self.notes;
        if self.interrupted {
            let n = points
                .iter()
                .filter(|p| p.simulation_status == Some(SimStatus::Interrupted))
                .count();
            notes.push(format!(
                "interrupted: {n} of {} points not simulated to the end (their simulated values are null; the theory is complete)",
                points.len()
            ));
        }
        let fits = match kind {
            Kind::Temperature => {
                notes.push(
                    "for Kramers-type rates the apparent activation energy differs from E_b: the prefactor depends on T through the friction and D, and E_b/kT itself changes with T".into(),
                );
                fits_for(&points, &units, kind, kt_unit)
            }
            Kind::Force => fits_for(&points, &units, kind, kt_unit),
            _ => Vec::new(),
        };
        ScanReport {
            key: self.spec.key.clone(),
            kind,
            units,
            points,
            fits,
            notes,
            interrupted: self.interrupted,
            action_first,
            omega_barrier_first: omega_first,
            log: self.spec.log,
        }
    }
}

/// Simulates point `i` (value `v`) of a scan with its own seed from `master`; `None` when `stop`
/// ended it before it finished (its partial numbers are dropped). Long-trajectory measurements
/// that do not fit the budget are skipped with a note in `skipped`.
#[allow(clippy::too_many_arguments)] // the point's full context
fn simulate_point(
    src: &dyn Variants,
    spec: &Spec,
    i: usize,
    v: f64,
    master: u64,
    threads: usize,
    stop: &AtomicBool,
    skipped: &mut Vec<String>,
) -> Result<Option<SimPoint>, ScanError> {
    // 63 bits: TOML integers are signed
    let seed = crate::seed::derive(master, (i as u64).wrapping_mul(crate::seed::SCAN_POINT)) >> 1;
    let (m, t) = match point_theory(src, &spec.key, v, Some(seed))? {
        (m, theory::Analysis::Full(t)) => (m, *t),
        // the same point gave a well a moment ago: only a changed file can do this
        (_, theory::Analysis::Running(_)) => {
            return Err(ScanError::Point {
                file: src.source(),
                key: spec.key.clone(),
                value: v,
                message: "the scenario changed during the scan".into(),
            });
        }
    };
    let bad = |e: String| ScanError::Point {
        file: src.source(),
        key: spec.key.clone(),
        value: v,
        message: e,
    };
    let settings = m.simulation.clone().unwrap_or_default();
    let plan =
        Plan::new(&m.system, &settings, &m.units.names.time, &t).map_err(|e| bad(e.to_string()))?;
    let opts = SessionOptions {
        threads,
        ..SessionOptions::default()
    };
    // the long-trajectory measurements run as in `compare`: skipped (with a note) when they do
    // not fit the step budget, never a reason to stop the scan
    let r = match session::run(&plan, &m.system, &t, &opts, stop, &mut ()) {
        Ok(r) => r,
        Err(SessionError::Sim(SimError::Interrupted)) => return Ok(None),
        Err(e) => return Err(bad(e.to_string())),
    };
    if let Some(e) = &r.well_to_well_error {
        skipped.push(format!(
            "{} = {v}: well-to-well count not run: {e}",
            spec.key
        ));
    }
    if r.interrupted {
        return Ok(None);
    }
    let out = r.simulation;
    if t.periodic.is_some() && out.periodic.is_none() {
        skipped.push(format!(
            "{} = {v}: periodic drift and diffusion not simulated (over simulation.budget_steps)",
            spec.key
        ));
    }
    Ok(Some(SimPoint {
        method: out.method,
        rate: out.rate,
        rate_ci95: out.rate_ci95,
        well_to_well: out.well_to_well.as_ref().map(|w| w.rate),
        well_to_well_ci95: out.well_to_well.as_ref().map(|w| w.rate_ci95),
        periodic: out.periodic.as_ref().map(|p| PeriodicPoint {
            drift: p.drift,
            drift_ci95: Some(p.drift_ci95),
            effective_diffusion: Some(p.effective_diffusion),
            effective_diffusion_ci95: Some(p.effective_diffusion_ci95),
            hop_forward: Some(p.hop_forward),
            hop_backward: Some(p.hop_backward),
        }),
        total_steps: out.total_steps,
        seed,
    }))
}

/// Joules per scenario energy unit (None for kT).
fn joule_per_unit(units: &crate::units::UnitNames) -> Option<f64> {
    crate::units::energy_joule(&units.energy).ok().flatten()
}

fn fits_for(
    points: &[Point],
    units: &crate::units::UnitNames,
    kind: Kind,
    kt_unit: f64,
) -> Vec<FitOut> {
    let mut series: Vec<(String, Vec<f64>, Option<Vec<f64>>)> = theory::catalogue::CATALOGUE
        .iter()
        .filter_map(|f| {
            let ys: Option<Vec<f64>> = points.iter().map(|p| p.rates[f.key]).collect();
            ys.map(|y| (f.key.to_string(), y, None))
        })
        .collect();
    let sim: Option<Vec<&SimPoint>> = points.iter().map(|p| p.simulation.as_ref()).collect();
    if let Some(s) = sim
        && s.iter().all(|p| p.rate > 0.0 && p.rate_ci95[0] > 0.0)
    {
        let y = s.iter().map(|p| p.rate).collect();
        // σ of ln k from the 95% interval
        let sig = s
            .iter()
            .map(|p| (p.rate_ci95[1].ln() - p.rate_ci95[0].ln()) / (2.0 * 1.959_964))
            .collect();
        series.push(("simulation".into(), y, Some(sig)));
    }
    let xs: Vec<f64> = points
        .iter()
        .map(|p| match kind {
            Kind::Temperature => 1.0 / p.value,
            _ => p.value,
        })
        .collect();
    series
        .into_iter()
        .filter_map(|(name, y, sig)| {
            let ln: Vec<f64> = y.iter().map(|v| v.ln()).collect();
            let l = fit::line(&xs, &ln, sig.as_deref())?;
            let (value, half) = match kind {
                // slope = −E_a/k_B (x = 1/T): E_a in J, then in the scenario's energy unit
                Kind::Temperature => {
                    let per = joule_per_unit(units)?;
                    (-l.slope * K_B / per, l.t95 * l.slope_se * K_B / per)
                }
                // slope = x‡/kT per unit force (energy/length): x‡ = slope · kT in that unit
                _ => (l.slope * kt_unit, l.t95 * l.slope_se * kt_unit),
            };
            let ph = l.t95 * l.intercept_se;
            Some(FitOut {
                rate: name,
                value,
                value_ci95: [value - half, value + half],
                prefactor: l.intercept.exp(),
                prefactor_ci95: [(l.intercept - ph).exp(), (l.intercept + ph).exp()],
                line: l,
            })
        })
        .collect()
}
