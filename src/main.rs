//! The `escapade` binary: parse arguments, call the library, render, and map errors to one line
//! on stderr with exit code 2 (user mistakes) or 1 (anything else). Ctrl-C during a simulation
//! stops it cleanly: finished records are kept and the summary so far is printed (exit 130).

mod cli;

use clap::Parser;
use cli::{Cli, Command, Common, ObserveOpts, ObservedRun, SimOpts};
use escapade::observe::{self, ColumnRef, Interval, ObserveError, Source};
use escapade::report::observe::{ObserveReport, WindowsReport};
use escapade::report::{
    CompareReport, RateReport, SimulateReport, SurveyReport, compare_rows, json, table, vs_observed,
};
use escapade::scenario::{Model, Override, PlaneModel, Study};
use escapade::simulate::session::{Phase, SessionError, SessionOptions};
use escapade::simulate::{self, Plan, SimError, records};
use escapade::{landscape::Landscape, stats, theory};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};

/// Set by Ctrl-C; the simulation loops poll it.
static STOP: AtomicBool = AtomicBool::new(false);

/// A user-facing failure: the message is one line.
struct Failure {
    message: String,
    code: u8,
}

impl Failure {
    fn user(message: impl Into<String>) -> Self {
        Self {
            message: message.into(),
            code: 2,
        }
    }
}

/// What a command produced: text for stdout, the exit code, and a status line for stderr
/// (printed after the output, e.g. that the run was interrupted).
struct Done {
    text: String,
    code: u8,
    status: Option<String>,
}

fn ok(text: String) -> Result<Done, Failure> {
    Ok(Done {
        text,
        code: 0,
        status: None,
    })
}

/// The `--set` overrides of a command.
fn overrides_of(common: &Common) -> Result<Vec<Override>, Failure> {
    common
        .set
        .iter()
        .map(|s| Override::parse(s))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| Failure::user(e.to_string()))
}

/// A scenario of either dimension (survey and rate).
fn load_study(file: &Path, common: &Common) -> Result<Study, Failure> {
    Study::load(file, &overrides_of(common)?).map_err(|e| Failure::user(e.to_string()))
}

/// `survey` and `rate` on a two-coordinate scenario.
fn plane_cmd(m: &PlaneModel, rates: bool, as_json: bool) -> Result<Done, Failure> {
    use escapade::report::plane::{self, PlaneRateReport, PlaneSurveyReport};
    let s = m.system.surface.surface();
    if !rates {
        let l = escapade::landscape::surface::analyse_surface(s, m.system.start, m.system.target)
            .map_err(|e| {
            let e = theory::plane::PlaneError::from(e);
            Failure::user(format!("{}: {}: {e}", m.source, e.key()))
        })?;
        let r = PlaneSurveyReport::new(m, &l);
        return ok(if as_json {
            json::render(&r)
        } else {
            plane::survey_table(&r)
        });
    }
    let t = theory::plane::analyse_plane(&m.system)
        .map_err(|e| Failure::user(format!("{}: {}: {e}", m.source, e.key())))?;
    let r = PlaneRateReport::new(m, &t);
    ok(if as_json {
        json::render(&r)
    } else {
        plane::rate_table(&r)
    })
}

fn load(file: Option<&Path>, common: &Common) -> Result<Model, Failure> {
    let overrides = overrides_of(common)?;
    match file {
        Some(f) => Model::load(f, &overrides),
        None => Model::from_text(
            escapade::DEMO_SCENARIO,
            "(demo)",
            &PathBuf::from("."),
            &overrides,
        ),
    }
    .map_err(|e| Failure::user(e.to_string()))
}

fn theory_of(m: &Model) -> Result<theory::TheoryReport, Failure> {
    theory::analyse(&m.system).map_err(|e| Failure::user(format!("{}: {}: {e}", m.source, e.key())))
}

/// The rates' intervals from a table's sigma_U column (None without one).
fn uncertainty_of(m: &Model) -> Result<Option<escapade::uncertainty::UncertaintyReport>, Failure> {
    let opts = m.uncertainty_options();
    escapade::uncertainty::propagate(&m.system, &opts)
        .map_err(|e| Failure::user(format!("{}: {}: {e}", m.source, e.key())))
}

fn run(cli: Cli) -> Result<Done, Failure> {
    let quiet = cli.quiet;
    match cli.command {
        Command::Survey { file, plot, common } => {
            let m = match load_study(&file, &common)? {
                Study::Line(m) => *m,
                Study::Plane(m) => {
                    if plot.is_some() {
                        return Err(Failure::user(format!(
                            "{}: surface: survey --plot is not yet available for two-coordinate scenarios",
                            m.source
                        )));
                    }
                    return plane_cmd(&m, false, common.json);
                }
            };
            let l = Landscape::analyse(
                &m.system.potential,
                m.system.start,
                m.system.target,
                m.system.mass,
            )
            .map_err(|e| Failure::user(format!("{}: {}: {e}", m.source, e.key())))?;
            if let Some(path) = plot {
                let rows = escapade::report::svg::fitted_rows(&m);
                write_file(
                    &path,
                    &escapade::report::svg::landscape(&m, &l, rows.as_deref()),
                )?;
            }
            let r = SurveyReport::new(&m, &l);
            ok(if common.json {
                json::render(&r)
            } else {
                table::survey(&r)
            })
        }
        Command::Rate { file, common } => {
            let m = match load_study(&file, &common)? {
                Study::Line(m) => *m,
                Study::Plane(m) => return plane_cmd(&m, true, common.json),
            };
            let analysis = theory::analyse_or_running(&m.system)
                .map_err(|e| Failure::user(format!("{}: {}: {e}", m.source, e.key())))?;
            let t = match analysis {
                theory::Analysis::Full(t) => *t,
                theory::Analysis::Running(p) => {
                    let r = escapade::report::RunningReport::new(&m, &p);
                    return ok(if common.json {
                        json::render(&r)
                    } else {
                        table::running(&r)
                    });
                }
            };
            let mut r = RateReport::new(&m, &t);
            r.uncertainty = uncertainty_of(&m)?;
            ok(if common.json {
                json::render(&r)
            } else {
                table::rate(&r)
            })
        }
        Command::Simulate {
            file,
            plot,
            common,
            sim,
        } => simulate_cmd(
            Some(&file),
            quiet,
            &common,
            &sim,
            false,
            plot.as_deref(),
            None,
        ),
        Command::Compare {
            file,
            common,
            sim,
            observed,
        } => simulate_cmd(
            Some(&file),
            quiet,
            &common,
            &sim,
            true,
            None,
            Some(&observed),
        ),
        Command::Demo { common, sim } => simulate_cmd(None, quiet, &common, &sim, true, None, None),
        Command::Scan {
            file,
            vary,
            from,
            to,
            points,
            log,
            simulate,
            csv,
            plot,
            common,
            threads,
            all_columns,
        } => {
            let overrides = overrides_of(&common)?;
            let spec = escapade::scan::Spec {
                key: vary,
                from,
                to,
                points,
                log,
            };
            let (threads, thread_warning) = simulate::effective_threads(threads);
            // only simulations stop cleanly; a theory scan ends at Ctrl-C as any program does
            if simulate {
                let _ = ctrlc::set_handler(|| STOP.store(true, Ordering::SeqCst));
            }
            let mut r = escapade::scan::run(
                &escapade::scenario::FileVariants {
                    file: &file,
                    base: &overrides,
                },
                &spec,
                simulate,
                threads,
                &STOP,
            )
            .map_err(|e| Failure::user(e.to_string()))?;
            if simulate && let Some(w) = thread_warning {
                r.notes.push(w);
            }
            if let Some(path) = csv {
                std::fs::write(&path, escapade::report::csv::scan(&r))
                    .map_err(|e| Failure::user(format!("{}: cannot write: {e}", path.display())))?;
            }
            if let Some(path) = plot {
                std::fs::write(&path, escapade::report::svg::scan(&r))
                    .map_err(|e| Failure::user(format!("{}: cannot write: {e}", path.display())))?;
            }
            let text = if common.json {
                json::render(&r)
            } else {
                table::scan(&r, all_columns)
            };
            Ok(if r.interrupted {
                Done {
                    text,
                    code: 130,
                    status: Some(
                        "interrupted: points not simulated to the end are marked \"interrupted\" and have no simulated values".into(),
                    ),
                }
            } else {
                Done {
                    text,
                    code: 0,
                    status: None,
                }
            })
        }
        Command::Merge {
            files,
            json: as_json,
            output,
        } => merge_cmd(&files, as_json, output.as_deref()),
        Command::Observe(o) => observe_cmd(&o),
    }
}

/// A progress bar on stderr once a run has lasted a second, if anyone can see it.
struct Progress {
    show: bool,
    start: std::time::Instant,
    bar: Option<indicatif::ProgressBar>,
    total: u64,
    escaped: u64,
    steps: u64,
    dt: f64,
}

impl Progress {
    fn update(&mut self, o: &stats::Outcome, done: usize) {
        self.escaped += u64::from(o.escaped);
        self.steps += o.steps;
        if !self.show {
            return;
        }
        if self.bar.is_none() && self.start.elapsed().as_secs_f64() > 1.0 {
            let b = indicatif::ProgressBar::new(self.total);
            b.set_style(
                indicatif::ProgressStyle::with_template(
                    "{bar:30} {pos}/{len} trajectories · {msg} · {elapsed_precise} (eta {eta})",
                )
                .expect("a valid template"),
            );
            self.bar = Some(b);
        }
        if let Some(b) = &self.bar {
            b.set_position(done as u64);
            let k = self.escaped as f64 / (self.steps as f64 * self.dt);
            b.set_message(format!("{} escaped, rate so far {k:.4e}", self.escaped));
        }
    }
}

/// The bar is cleared however its scope ends (an error included), so that an error line never
/// runs into it.
impl Drop for Progress {
    fn drop(&mut self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}

/// JSON going to a pipe: no progress bar then.
fn json_to_pipe(common: &Common) -> bool {
    common.json && !std::io::stdout().is_terminal()
}

/// Writes an output file, naming it in the error.
fn write_file(path: &Path, text: &str) -> Result<(), Failure> {
    std::fs::write(path, text)
        .map_err(|e| Failure::user(format!("{}: cannot write: {e}", path.display())))
}

/// A session's notes and progress bar on stderr.
struct Notes {
    /// print a line as each phase starts
    notes: bool,
    /// show a progress bar during a brute-force run
    bar: bool,
    progress: Option<Progress>,
}

impl simulate::session::Observer for Notes {
    fn phase(&mut self, plan: &Plan, phase: Phase) {
        // a finished phase's bar is cleared before the next note
        self.progress = None;
        let dt = plan.params.dt;
        let line = match phase {
            Phase::BruteForce { trajectories } => {
                self.progress = Some(Progress {
                    show: self.bar,
                    start: std::time::Instant::now(),
                    bar: None,
                    total: trajectories,
                    escaped: 0,
                    steps: 0,
                    dt,
                });
                let given = if plan.dt_given {
                    "given"
                } else {
                    "default from the landscape"
                };
                format!(
                    "simulating {trajectories} trajectories by brute force, dt = {dt:.4e} ({given})"
                )
            }
            Phase::Rare => format!(
                "estimating the rate by {}, dt = {dt:.4e} ({})",
                plan.method.as_str(),
                plan.method_reason
            ),
            Phase::WellToWell => "counting well-to-well transitions in long trajectories".into(),
            Phase::Periodic => "measuring drift, diffusion and hopping in long trajectories".into(),
        };
        if self.notes {
            eprintln!("{line}");
        }
    }

    fn finished(&mut self, o: &stats::Outcome, done: usize) {
        if let Some(p) = &mut self.progress {
            p.update(o, done);
        }
    }
}

fn simulate_cmd(
    file: Option<&Path>,
    quiet: bool,
    common: &Common,
    sim: &SimOpts,
    with_theory: bool,
    plot: Option<&Path>,
    observed: Option<&ObservedRun>,
) -> Result<Done, Failure> {
    let m = load(file, common)?;
    let t = theory_of(&m)?;
    // the trajectories are read before the simulation, so that a bad file fails at once
    let observed = observed.map(observed_of).transpose()?.flatten();
    let settings = m.simulation.clone().unwrap_or_default();
    let plan = Plan::new(&m.system, &settings, &m.units.names.time, &t)
        .map_err(|e| Failure::user(format!("{}: {e}", m.source)))?;
    let shard = sim
        .shard
        .as_deref()
        .map(simulate::parse_shard)
        .transpose()
        .map_err(Failure::user)?;
    // a second Ctrl-C falls through to the default (the first one already asked for a stop)
    let _ = ctrlc::set_handler(|| STOP.store(true, Ordering::SeqCst));
    let opts = SessionOptions {
        threads: sim.threads,
        shard,
        records: sim.records.clone(),
        resume: sim.resume,
    };
    let mut notes = Notes {
        notes: !quiet && !common.json,
        bar: !quiet && std::io::stderr().is_terminal() && !json_to_pipe(common),
        progress: None,
    };
    let session = simulate::session::run(&plan, &m.system, &t, &opts, &STOP, &mut notes);
    drop(notes);
    let session = match session {
        Ok(s) => s,
        Err(SessionError::Records(e)) => return Err(Failure::user(e.to_string())),
        Err(SessionError::Sim(SimError::Interrupted)) => {
            return Err(Failure {
                message: format!("{}: {}", m.source, SimError::Interrupted),
                code: 130,
            });
        }
        Err(e) => return Err(Failure::user(format!("{}: {e}", m.source))),
    };
    if let Some(path) = plot
        && plan.method == simulate::Method::BruteForce
    {
        let (dt, max_steps) = (plan.params.dt, plan.params.max_steps);
        let s = escapade::stats::summarise(&session.outcomes, dt, max_steps);
        let tu = if m.units.names.time == "1" {
            "τ"
        } else {
            &m.units.names.time
        };
        write_file(
            path,
            &escapade::report::svg::survival(&session.outcomes, dt, s.rate, tu),
        )?;
    }
    let interrupted = session.interrupted;
    let mut out = session.simulation;
    let code = if interrupted { 130 } else { 0 };
    let text = if with_theory {
        let mut theory = RateReport::new(&m, &t);
        theory.uncertainty = uncertainty_of(&m)?;
        let (comparison, verdict) =
            compare_rows(&theory.formulas, &out, t.landscape.barrier_height);
        let observed = observed.map(|o| {
            vs_observed::compare_observed(
                &o,
                &m.system,
                &t,
                theory.uncertainty.as_ref(),
                (out.rate > 0.0).then_some(&out),
            )
        });
        let r = CompareReport {
            theory,
            simulation: out,
            comparison,
            verdict,
            observed,
        };
        if common.json {
            json::render(&r)
        } else {
            table::compare(&r)
        }
    } else {
        // `simulate` shows no theory section: its implausible-value warnings go with the run's
        out.warnings
            .extend(theory::plausibility_warnings(&m.system, &t));
        let r = SimulateReport {
            header: escapade::report::Header::new(&m),
            units: m.units.names.clone(),
            landscape: escapade::report::LandscapeOut::new(&t.landscape, &m.units),
            simulation: out,
        };
        if common.json {
            json::render(&r)
        } else {
            table::simulate(&r)
        }
    };
    Ok(Done {
        text,
        code,
        status: interrupted.then(|| {
            "interrupted: the output covers the work finished so far (finished records are kept)"
                .into()
        }),
    })
}

fn merge_cmd(files: &[PathBuf], as_json: bool, output: Option<&Path>) -> Result<Done, Failure> {
    let paths: Vec<&Path> = files.iter().map(PathBuf::as_path).collect();
    let c = records::merge(&paths).map_err(|e| Failure::user(e.to_string()))?;
    if let Some(out) = output {
        records::write_all(out, &c).map_err(|e| Failure::user(e.to_string()))?;
    }
    let s = stats::summarise(&c.outcomes, c.header.dt, c.header.max_steps);
    let r = escapade::report::MergeReport::new(&c, s);
    ok(if as_json {
        json::render(&r)
    } else {
        table::merge(&r)
    })
}

/// A trajectory column from the command line: a number from 1, or a header name.
fn column(flag: &str, c: Option<&str>) -> Result<Option<ColumnRef>, Failure> {
    let Some(c) = c else { return Ok(None) };
    match c.trim().parse::<usize>() {
        Ok(0) => Err(Failure::user(format!(
            "{flag} 0: columns are numbered from 1"
        ))),
        Ok(n) => Ok(Some(ColumnRef::Index(n - 1))),
        Err(_) => Ok(Some(ColumnRef::Name(c.trim().to_string()))),
    }
}

/// `--cores LO:HI,LO:HI`.
fn parse_cores(text: &str) -> Result<[Interval; 2], Failure> {
    let bad = || {
        Failure::user(format!(
            "--cores {text}: expected two intervals LO:HI,LO:HI of numbers, e.g. --cores=-1.3:-0.7,0.7:1.3"
        ))
    };
    let cores: Vec<Interval> = text
        .split(',')
        .map(|part| {
            let (lo, hi) = part.split_once(':').ok_or_else(bad)?;
            let num = |v: &str| v.trim().parse::<f64>().map_err(|_| bad());
            Ok(Interval {
                lo: num(lo)?,
                hi: num(hi)?,
            })
        })
        .collect::<Result<_, Failure>>()?;
    <[Interval; 2]>::try_from(cores).map_err(|_| bad())
}

/// `compare --observed`: the kinetics of the user's trajectories (no D(x) pass); None without
/// files.
fn observed_of(o: &ObservedRun) -> Result<Option<observe::ObservedReport>, Failure> {
    if o.observed.is_empty() {
        return Ok(None);
    }
    let opts = observe::Options {
        columns: observe::Columns {
            position: column("--position", o.position.as_deref())?,
            time: column("--time", o.time.as_deref())?,
        },
        dt: o.dt,
        cores: o.cores.as_deref().map(parse_cores).transpose()?,
        diffusion: None,
        ..observe::Options::default()
    };
    let sources: Vec<Source> = o.observed.iter().cloned().map(Source::File).collect();
    observe::analyse(&sources, &opts)
        .map(Some)
        .map_err(observe_failure)
}

/// An analysis error as one line; an option's name as the command line spells it.
fn observe_failure(e: ObserveError) -> Failure {
    match e {
        ObserveError::Option { option, message } if option != "trajectories" => {
            Failure::user(format!("--{}: {message}", option.replace('_', "-")))
        }
        e => Failure::user(e.to_string()),
    }
}

/// A scenario reading the written profile table: [units] and [particle] as in `scenario` (the
/// file's own text, so unit strings stay as written), the table, and the reactant at core A.
/// When the table has a D column (`table_d`), [particle] keeps only the mass: the scenario reader
/// refuses a second D beside the table's, and a memory time needs a friction.
fn scenario_for_profile(
    scenario: Option<&Path>,
    profile: &Path,
    out: &Path,
    start: f64,
    table_d: bool,
    observed: Option<&ObservedParticle>,
) -> Result<(String, Vec<String>), Failure> {
    let mut doc = toml::Table::new();
    let mut notes = Vec::new();
    let mut particle = None;
    if let Some(f) = scenario {
        let text = std::fs::read_to_string(f)
            .map_err(|e| Failure::user(format!("{}: cannot read: {e}", f.display())))?;
        let mut t: toml::Table = text
            .parse()
            .map_err(|e| Failure::user(format!("{}: {e}", f.display()).replace('\n', " ")))?;
        if let Some(u) = t.remove("units") {
            doc.insert("units".into(), u);
        }
        particle = t.remove("particle");
    }
    if let Some(obs) = observed {
        particle = Some(obs.particle(table_d, out, &mut notes).into());
    } else if table_d && let Some(toml::Value::Table(p)) = &mut particle {
        if p.contains_key("memory_time") {
            notes.push(format!(
                "{}: particle.memory_time left out (a memory kernel needs particle.friction, which the table's D replaces)",
                out.display()
            ));
        }
        p.retain(|key, _| key == "mass");
        if p.is_empty() {
            particle = None;
        }
    }
    match particle {
        Some(p) => {
            doc.insert("particle".into(), p);
        }
        None if table_d => {}
        None => {
            notes.push(format!(
                "{}: give [particle] (a diffusion coefficient or a mass and friction) before `rate` reads it; trajectories alone do not fix the dynamics here (--velocity or --friction measure them)",
                out.display()
            ));
        }
    }
    // the table's path as the scenario will look for it: beside it, or absolute
    let dir = |p: &Path| {
        p.parent()
            .filter(|d| !d.as_os_str().is_empty())
            .unwrap_or(Path::new("."))
            .canonicalize()
            .ok()
    };
    let table = match (dir(profile), dir(out), profile.file_name()) {
        (Some(a), Some(b), Some(name)) if a == b => name.to_string_lossy().into_owned(),
        (Some(a), _, Some(name)) => a.join(name).display().to_string(),
        _ => profile.display().to_string(),
    };
    let mut pot = toml::Table::new();
    pot.insert("table".into(), table.into());
    doc.insert("potential".into(), pot.into());
    let mut states = toml::Table::new();
    states.insert("start".into(), start.into());
    doc.insert("states".into(), states.into());
    let particle_missing = !table_d && !doc.contains_key("particle");
    // sections in the order a person writes them
    let mut body = String::new();
    for name in ["units", "particle", "potential", "states"] {
        if let Some(section) = doc.remove(name) {
            let one = toml::Table::from_iter([(name.to_string(), section)]);
            let text = toml::to_string(&one).map_err(|e| Failure {
                message: format!("cannot write the scenario: {e}"),
                code: 1,
            })?;
            body.push_str(&text);
            body.push('\n');
        }
    }
    let head = format!(
        "# written by `escapade observe`: the free energy{} of observed trajectories ({}); start = centre of core A\n",
        if table_d { " and D(x)" } else { "" },
        profile.display()
    );
    let tail = if particle_missing {
        "[particle]\n# diffusion = ...   # not known from the trajectories: fill in\n"
    } else {
        ""
    };
    Ok((format!("{head}{body}{tail}"), notes))
}

/// What the velocity analysis says about the particle, in the scenario's units, for the
/// written scenario.
struct ObservedParticle {
    /// the mass (given or from equipartition)
    mass: f64,
    /// γ, when the analysis passes it on
    friction: Option<f64>,
    /// τ of the kernel fit, likewise
    memory_time: Option<f64>,
    /// why γ or τ is left out
    left_out: Vec<String>,
}

impl ObservedParticle {
    /// The mass as analysed, γ and τ by [`observe::velocity::Friction::for_scenario`].
    fn new(f: &observe::velocity::Friction) -> Self {
        let s = f.for_scenario();
        Self {
            mass: f.mass.value,
            friction: s.friction,
            memory_time: s.memory_time,
            left_out: s.left_out,
        }
    }

    /// The [particle] section; beside a table's D column only the mass (the scenario reader
    /// takes D(x) from the table, and γ at the barrier then follows from D and the mass).
    fn particle(&self, table_d: bool, out: &Path, notes: &mut Vec<String>) -> toml::Table {
        let mut p = toml::Table::new();
        p.insert("mass".into(), self.mass.into());
        if table_d {
            if self.friction.is_some() {
                notes.push(format!(
                    "{}: the table's D(x) gives the dynamics, so the observed friction (and memory time) is not written beside it; without --diffusion the scenario gets particle.friction",
                    out.display()
                ));
            }
            return p;
        }
        if let Some(g) = self.friction {
            p.insert("friction".into(), g.into());
            if let Some(t) = self.memory_time {
                p.insert("memory_time".into(), t.into());
            }
        }
        notes.extend(self.left_out.iter().map(|m| {
            let what = if self.friction.is_none() {
                "particle.friction"
            } else {
                "particle.memory_time"
            };
            format!("{}: {what} left out: {m}", out.display())
        }));
        p
    }
}

/// The friction options of `observe` (None without --velocity/--friction) and the unit system
/// with a mass conversion when they are given.
fn friction_options(
    o: &ObserveOpts,
    model: Option<&Model>,
    units: &escapade::units::UnitSystem,
) -> Result<
    (
        Option<observe::FrictionOptions>,
        escapade::units::UnitSystem,
    ),
    Failure,
> {
    let velocities = match (&o.velocity, o.friction) {
        (Some(c), _) => observe::VelocitySource::Column(
            column("--velocity", Some(c))?
                .ok_or_else(|| Failure::user("--velocity: give a column"))?,
        ),
        (None, true) => observe::VelocitySource::CentralDifference,
        (None, false) => {
            if o.mass.is_some() {
                return Err(Failure::user(
                    "--mass: goes with --velocity or --friction (the mass of the friction analysis)",
                ));
            }
            return Ok((None, units.clone()));
        }
    };
    let with_mass = escapade::units::UnitSystem::new(units.names.clone(), units.temperature, true)
        .map_err(|e| {
            Failure::user(format!(
                "--scenario: {e}: the friction analysis converts masses"
            ))
        })?;
    let mass = match o.mass {
        Some(m) if !(m.is_finite() && m > 0.0) => {
            return Err(Failure::user(format!("--mass {m}: must be positive")));
        }
        Some(m) => with_mass.mass_to_internal(m),
        None => model.and_then(|m| m.system.mass),
    };
    Ok((
        Some(observe::FrictionOptions { velocities, mass }),
        with_mass,
    ))
}

/// `observe --spring`: D at each restrained window's mean position.
fn windows_cmd(
    o: &ObserveOpts,
    opts: &observe::Options,
    units: &escapade::units::UnitSystem,
    scenario: Option<String>,
) -> Result<Done, Failure> {
    let refused = [
        ("--profile", o.profile.is_some()),
        ("--scenario-out", o.scenario_out.is_some()),
        ("--plot", o.plot.is_some()),
        ("--diffusion", o.diffusion),
        ("--cores", o.cores.is_some()),
        ("--bin-width", o.bin_width.is_some()),
        ("--velocity", o.velocity.is_some()),
        ("--friction", o.friction),
        ("--mass", o.mass.is_some()),
    ];
    if let Some((flag, _)) = refused.iter().find(|r| r.1) {
        return Err(Failure::user(format!(
            "{flag}: not with --spring: restrained windows give D at each window's mean, no free energy, kinetics or friction (analyse free trajectories for those)"
        )));
    }
    let springs: Vec<f64> = o.spring.iter().map(|&k| units.energy_to_kt(k)).collect();
    let sources: Vec<Source> = o.files.iter().cloned().map(Source::File).collect();
    let w = observe::windows(&sources, &springs, opts).map_err(observe_failure)?;
    let r = WindowsReport::new(w, units, scenario);
    ok(if o.json {
        json::render(&r)
    } else {
        table::observe_windows(&r)
    })
}

fn observe_cmd(o: &ObserveOpts) -> Result<Done, Failure> {
    let model = match &o.scenario {
        Some(f) => Some(Model::load(f, &[]).map_err(|e| Failure::user(e.to_string()))?),
        None => None,
    };
    let units = model
        .as_ref()
        .map_or_else(escapade::units::UnitSystem::reduced, |m| m.units.clone());
    let scenario = model.as_ref().map(|m| m.source.clone());
    let mut opts = observe::Options {
        columns: observe::Columns {
            position: column("--position", o.position.as_deref())?,
            time: column("--time", o.time.as_deref())?,
        },
        dt: o.dt,
        bin_width: o.bin_width,
        seed: o.seed,
        resamples: o.resamples,
        ..observe::Options::default()
    };
    if !o.spring.is_empty() {
        return windows_cmd(o, &opts, &units, scenario);
    }
    let (friction, units) = friction_options(o, model.as_ref(), &units)?;
    opts.friction = friction;
    opts.cores = o.cores.as_deref().map(parse_cores).transpose()?;
    opts.diffusion = o.diffusion.then(|| observe::counts::DiffusionOptions {
        lags: o.lags.clone(),
        bins: o.d_bins,
        ..observe::counts::DiffusionOptions::default()
    });
    let sources: Vec<Source> = o.files.iter().cloned().map(Source::File).collect();
    let observed = observe::analyse(&sources, &opts).map_err(observe_failure)?;
    let mut r = ObserveReport::new(observed, &units, scenario);
    if let Some(path) = &o.profile {
        let mut text = Vec::new();
        let (fe, kt) = (&r.observed.free_energy, units.kt_in_energy_unit);
        match &r.observed.diffusion {
            Some(d) => observe::counts::write_profile_with_diffusion(fe, kt, d, &mut text),
            None => observe::write_profile(fe, kt, &mut text),
        }
        .map_err(|e| Failure::user(format!("{}: cannot write: {e}", path.display())))?;
        write_file(path, &String::from_utf8_lossy(&text))?;
        r.written.profile = Some(path.display().to_string());
        if let Some(out) = &o.scenario_out {
            let a = r.observed.kinetics.core_a;
            let particle = r.observed.friction.as_ref().map(ObservedParticle::new);
            let (text, notes) = scenario_for_profile(
                o.scenario.as_deref(),
                path,
                out,
                0.5 * (a.lo + a.hi),
                r.observed.diffusion.is_some(),
                particle.as_ref(),
            )?;
            write_file(out, &text)?;
            r.written.scenario = Some(out.display().to_string());
            r.notes.extend(notes);
            if particle.is_some() {
                // the regime the observed friction implies, as `rate` on the written file finds it
                match Model::load(out, &[])
                    .map_err(|e| e.to_string())
                    .and_then(|m| {
                        theory::analyse(&m.system).map_err(|e| format!("{}: {e}", m.source))
                    }) {
                    Ok(t) => r.regime = Some(t.regime),
                    Err(e) => r.notes.push(format!("no regime diagnosis: {e}")),
                }
            }
        }
    }
    if let Some(path) = &o.plot {
        write_file(path, &escapade::report::svg::observed(&r))?;
    }
    ok(if o.json {
        json::render(&r)
    } else {
        table::observe(&r)
    })
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            use clap::error::ErrorKind;
            if matches!(e.kind(), ErrorKind::DisplayHelp | ErrorKind::DisplayVersion)
                || e.kind() == ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand
            {
                let _ = e.print();
                return ExitCode::SUCCESS;
            }
            // clap's message, folded to one line (without its usage block)
            let text = e.to_string();
            let line: Vec<&str> = text
                .lines()
                .map(str::trim)
                .take_while(|l| !l.starts_with("Usage:"))
                .filter(|l| !l.is_empty())
                .collect();
            eprintln!("{} (see escapade --help)", line.join(" "));
            return ExitCode::from(2);
        }
    };
    match run(cli) {
        Ok(done) => {
            use std::io::Write;
            // a closed pipe (e.g. `| head`) is not an error worth a message
            let mut out = std::io::stdout().lock();
            let written = writeln!(out, "{}", done.text.trim_end()).and_then(|()| out.flush());
            if let Some(s) = &done.status {
                eprintln!("{s}");
            }
            match written {
                Ok(()) => ExitCode::from(done.code),
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => ExitCode::from(done.code),
                Err(e) => {
                    eprintln!("error: cannot write the output: {e}");
                    ExitCode::from(1)
                }
            }
        }
        Err(f) => {
            // echoed user text may hold control characters: keep the message on one line
            let line: String = f
                .message
                .chars()
                .map(|c| {
                    if c.is_control() {
                        c.escape_default().to_string()
                    } else {
                        c.to_string()
                    }
                })
                .collect();
            eprintln!("error: {line}");
            ExitCode::from(f.code)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// An error returned while the progress bar is up must not leave the bar on stderr, where it
    /// would run into the error line (common practice, no source).
    #[test]
    fn progress_bar_is_cleared_when_an_error_leaves_its_scope() {
        let bar = indicatif::ProgressBar::with_draw_target(
            Some(10),
            indicatif::ProgressDrawTarget::hidden(),
        );
        let failing = |bar: indicatif::ProgressBar| -> Result<(), Failure> {
            let _progress = Progress {
                show: true,
                start: std::time::Instant::now(),
                bar: Some(bar),
                total: 10,
                escaped: 0,
                steps: 0,
                dt: 0.1,
            };
            Err(Failure::user("the records file cannot be written"))
        };
        assert!(failing(bar.clone()).is_err());
        assert!(bar.is_finished());
    }
}
