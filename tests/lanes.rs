//! The lock-step lanes and the one-trajectory path step through the same integrator functions
//! and start from the same fresh state, so a trajectory's outcome is the same bits whichever runs
//! it. Checked per integrator, with constant D and D(x), fixed and thermal-free starts, a mass
//! other than 1 (the Maxwell draw divides by sqrt(m)) and trajectories that end in every slot of
//! a lane block (64 steps), including censoring at the horizon.
//!
//! Exact equality, no tolerance: both paths must perform the same floating-point operations on
//! the same random numbers (common practice for reproducible engines, no source).

use escapade::potential::{Diffusion, Family, Formula};
use escapade::simulate::engine::{Kind, Params, Start, first_passage, run_chunk};
use escapade::simulate::force::{ConstD, GridD, Mobility};
use escapade::stats::Outcome;
use std::collections::BTreeMap;
use std::sync::atomic::{AtomicBool, AtomicUsize};

const N: u64 = 40;

fn params(kind: Kind, dt: f64, max_steps: u64) -> Params {
    Params {
        kind,
        dt,
        max_steps,
        seed: 2024,
        target: 1.0,
        dir: 1.0,
        lo: -3.0,
        hi: 3.0,
        mass: 1.7,
        gamma: 2.5,
        memory_time: if kind == Kind::BaoabMemory { 0.3 } else { 0.0 },
        start: Start::At(-1.0),
    }
}

/// Outcomes of trajectories 0..N by the lanes (two workers sharing the cursor) and one by one.
fn both<M: Mobility>(p: &Params, mob: &M) -> (Vec<Outcome>, Vec<Outcome>) {
    // a low double well: escapes within a few thousand steps, some censored
    let force = Family::DoubleWell {
        eb: 2.0,
        a: 1.0,
        domain: (-3.0, 3.0),
    };
    let indices: Vec<u64> = (0..N).collect();
    let cursor = AtomicUsize::new(0);
    let never = AtomicBool::new(false);
    let mut lanes = Vec::new();
    run_chunk(p, &force, mob, &indices, &cursor, &never, &mut |o| {
        lanes.push(o)
    });
    lanes.sort_unstable();
    let alone = indices
        .iter()
        .map(|&i| first_passage(p, &force, mob, i))
        .collect();
    (lanes, alone)
}

fn check<M: Mobility>(kind: Kind, dt: f64, mob: &M) {
    // a horizon far beyond every escape, then the median escape step as one that censors half
    let mut horizon = 10_000_000;
    for round in 0..2 {
        let p = params(kind, dt, horizon);
        let (lanes, alone) = both(&p, mob);
        assert_eq!(lanes.len(), N as usize);
        assert_eq!(lanes, alone, "{kind:?}, horizon {horizon}");
        for (a, b) in lanes.iter().zip(&alone) {
            // the first-passage time, bit for bit
            assert_eq!(
                (a.steps as f64 * p.dt).to_bits(),
                (b.steps as f64 * p.dt).to_bits()
            );
        }
        if round == 1 {
            assert!(lanes.iter().any(|o| !o.escaped), "{kind:?}: none censored");
        }
        assert!(lanes.iter().any(|o| o.escaped), "{kind:?}: none escaped");
        // trajectories end in different slots of a 64-step block
        let slots: std::collections::BTreeSet<u64> = lanes.iter().map(|o| o.steps % 64).collect();
        assert!(slots.len() > 5, "{kind:?}: {slots:?}");
        let mut steps: Vec<u64> = lanes.iter().map(|o| o.steps).collect();
        steps.sort_unstable();
        horizon = steps[steps.len() / 2];
    }
}

#[test]
fn lanes_and_single_trajectories_agree_for_every_integrator() {
    check(Kind::Baoab, 0.01, &ConstD(1.0));
    check(Kind::BaoabMemory, 0.01, &ConstD(1.0));
    check(Kind::LeimkuhlerMatthews, 0.002, &ConstD(1.0));
    check(Kind::EulerMaruyama, 0.002, &ConstD(1.0));
}

#[test]
fn lanes_and_single_trajectories_agree_with_position_dependent_diffusion() {
    let d = Formula::parse("1 + 0.5*tanh(x)", &BTreeMap::new()).unwrap();
    let grid = GridD::new(&Diffusion::Formula(d), -3.0, 3.0);
    check(Kind::LeimkuhlerMatthews, 0.002, &grid);
    check(Kind::EulerMaruyama, 0.002, &grid);
}

#[test]
fn thermal_starts_agree() {
    // a two-point table: starts drawn uniformly on [-1.5, -0.5], the draw comes first in the stream
    let mut p = params(Kind::Baoab, 0.01, 1_000_000);
    p.start = Start::Thermal(vec![(-1.5, 0.0), (-0.5, 1.0)]);
    let (lanes, alone) = both(&p, &ConstD(1.0));
    assert_eq!(lanes, alone);
}
