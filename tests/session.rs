//! The simulation session (`simulate::session::run`): the escape run and the long-trajectory
//! measurements gathered into one record, the phases it announces, and its refusals. These are
//! this project's own rules (no outside source); every check is exact.

mod common;
use common::model;

use escapade::simulate::session::{self, Observer, Phase, SessionError, SessionOptions};
use escapade::simulate::{self, Method, Plan, RunOptions, SimulationResult, run_ensemble};
use escapade::stats::Outcome;
use std::sync::atomic::AtomicBool;

const DW: &str = "[particle]\nmass = 1.0\nfriction = 1.0\n[potential]\nfamily = \"double-well\"\nbarrier = 3.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n[simulation]\nseed = 5\ndynamics = \"underdamped\"\nmethod = \"brute-force\"\ntrajectories = 40\nwell_to_well = true\ntransitions = 40\n";

#[derive(Default)]
struct Seen {
    phases: Vec<Phase>,
    finished: usize,
}

impl Observer for Seen {
    fn phase(&mut self, _plan: &Plan, phase: Phase) {
        self.phases.push(phase);
    }
    fn finished(&mut self, _o: &Outcome, done: usize) {
        self.finished = done;
    }
}

#[test]
fn a_session_is_the_escape_run_plus_the_long_runs() {
    let (m, t) = model(DW, &[]);
    let plan = common::plan(&m, &t).unwrap();
    let never = AtomicBool::new(false);
    let mut seen = Seen::default();
    let opts = SessionOptions {
        threads: 2,
        ..SessionOptions::default()
    };
    let r = session::run(&plan, &m.system, &t, &opts, &never, &mut seen).unwrap();
    assert!(!r.interrupted);
    assert_eq!(
        seen.phases,
        [Phase::BruteForce { trajectories: 40 }, Phase::WellToWell]
    );
    assert_eq!(seen.finished, 40);
    // the escape part equals the ensemble run on its own
    let run = run_ensemble(&plan, &RunOptions::default(), &never, |_, _| {}).unwrap();
    assert_eq!(r.outcomes, run.outcomes);
    let alone = SimulationResult::brute_force(&plan, &run, None);
    assert_eq!(r.simulation.rate.to_bits(), alone.rate.to_bits());
    // and the well-to-well count adds its steps
    let (w, _) = simulate::run_transitions(&plan, &m.system, &t, 2, &never).unwrap();
    let got = r.simulation.well_to_well.as_ref().unwrap();
    assert_eq!((got.forward, got.backward), (w.forward, w.backward));
    assert_eq!(r.simulation.total_steps, alone.total_steps + w.total_steps);
}

#[test]
fn a_stopped_session_keeps_what_finished_and_skips_the_long_runs() {
    let (m, t) = model(DW, &[]);
    let plan = common::plan(&m, &t).unwrap();
    let stop = AtomicBool::new(true);
    let r = session::run(
        &plan,
        &m.system,
        &t,
        &SessionOptions::default(),
        &stop,
        &mut (),
    )
    .unwrap();
    assert!(r.interrupted);
    assert!(r.simulation.well_to_well.is_none());
}

#[test]
fn shards_skip_the_long_runs_with_a_warning_and_rare_methods_refuse_records() {
    let (m, t) = model(DW, &[]);
    let plan = common::plan(&m, &t).unwrap();
    let never = AtomicBool::new(false);
    let opts = SessionOptions {
        shard: Some((1, 2)),
        ..SessionOptions::default()
    };
    let r = session::run(&plan, &m.system, &t, &opts, &never, &mut ()).unwrap();
    assert_eq!(r.outcomes.len(), 20);
    assert!(r.simulation.well_to_well.is_none());
    assert!(
        r.simulation
            .warnings
            .iter()
            .any(|w| w.contains("not split into shards"))
    );
    let (m, t) = model(DW, &["simulation.method=\"ffs\""]);
    let plan = common::plan(&m, &t).unwrap();
    assert_eq!(plan.method, Method::Ffs);
    let e = session::run(&plan, &m.system, &t, &opts, &never, &mut ()).unwrap_err();
    assert!(matches!(e, SessionError::NotBruteForce("ffs")), "{e}");
}
