//! Cost of a step on a surface (simulate::plane) against a step on a line (simulate::engine), on
//! one thread, per integrator, with a tabulated force (the path of formula and table potentials)
//! and a closed form: the double well E (x² − 1)² on the line, the double well along an arc
//! (tests/surfaces) on the surface, E = 4. Each run is 16 trajectories of 20 000 steps that never
//! reach their target. The four cases of an integrator are run in turn, REPS times (default 7),
//! so a shared machine's load hits them alike; printed are the medians in ns per step per
//! coordinate and the median of the per-round ratios surface/line. Issue target: the surface at
//! most 2x the line per coordinate. Run: cargo bench --bench plane (REPS=15 for more rounds).

#[path = "../tests/surfaces/mod.rs"]
mod surfaces;

use escapade::potential::surface::{DiffusionTensor, Surface};
use escapade::potential::{AnyPotential, Family};
use escapade::simulate::engine::{self, Kind, Params, Start};
use escapade::simulate::force::{ConstD, FastForce, Force, Grid, GridForce};
use escapade::simulate::plane::{self, ExactForce, PlaneForce, PlaneParams, Region, SurfaceGrid};
use std::sync::atomic::{AtomicBool, AtomicUsize};
use std::time::Instant;
use surfaces::{Arc, BETA};

const TRAJ: u64 = 16;
const STEPS: u64 = 20_000;
const E: f64 = 4.0;

fn line<F: Force>(kind: Kind, f: &F) {
    let p = Params {
        kind,
        dt: 1e-3,
        max_steps: STEPS,
        seed: 1,
        target: 100.0,
        dir: 1.0,
        lo: -2.0,
        hi: 2.5,
        mass: 1.0,
        gamma: 5.0,
        memory_time: 0.0,
        start: Start::At(-1.0),
    };
    let idx: Vec<u64> = (0..TRAJ).collect();
    let (next, stop) = (AtomicUsize::new(0), AtomicBool::new(false));
    engine::run_chunk(&p, f, &ConstD(1.0), &idx, &next, &stop, &mut |o| {
        assert!(!o.escaped);
    });
}

fn surface<F: PlaneForce>(kind: Kind, f: &F) {
    let p = PlaneParams {
        kind,
        dt: 1e-3,
        max_steps: STEPS,
        seed: 1,
        start: [-1.0, -BETA],
        product: Region::HalfPlane {
            normal: [1.0, 0.0],
            offset: 100.0,
        },
        domain: Arc::new(E).domain(),
        diffusion: DiffusionTensor([[1.0, 0.3], [0.3, 0.8]]),
        mass: [1.0, 0.5],
        gamma: 5.0,
    };
    let idx: Vec<u64> = (0..TRAJ).collect();
    let (next, stop) = (AtomicUsize::new(0), AtomicBool::new(false));
    plane::run_chunk(&p, f, &idx, &next, &stop, &mut |o| assert!(!o.escaped));
}

/// Seconds of one call.
fn time(f: impl Fn()) -> f64 {
    let t = Instant::now();
    f();
    t.elapsed().as_secs_f64()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let reps: usize = std::env::var("REPS")
        .ok()
        .and_then(|r| r.parse().ok())
        .unwrap_or(7);
    let fam = Family::DoubleWell {
        eb: E,
        a: 1.0,
        domain: (-2.0, 2.5),
    };
    let FastForce::DoubleWell(closed) = FastForce::new(&AnyPotential::Family(fam)) else {
        unreachable!("the double well has a closed form")
    };
    let table = GridForce(Grid::build_scaled(
        &|x| 4.0 * E * x * (x * x - 1.0),
        &|x| 4.0 * E * (3.0 * x * x - 1.0),
        -2.0,
        2.5,
        escapade::simulate::force::FORCE_TOL,
        -1.0,
    ));
    let arc = Arc::new(E);
    let grid2 = SurfaceGrid::build(&arc, plane::FORCE_TOL_2D);
    let exact2 = ExactForce(arc);
    println!(
        "surface table {:?} cells, force error {:.1e} of max |grad U|; {reps} rounds",
        grid2.shape, grid2.rel_error
    );
    println!(
        "{:<8} {:>12} {:>12} {:>12} {:>12} {:>12} {:>12}",
        "", "line table", "surf. table", "ratio", "line closed", "surf. closed", "ratio"
    );
    let steps = (TRAJ * STEPS) as f64;
    for (name, kind) in [
        ("lm", Kind::LeimkuhlerMatthews),
        ("em", Kind::EulerMaruyama),
        ("baoab", Kind::Baoab),
    ] {
        // ns per step per coordinate: [line table, surface table, line closed, surface closed]
        let mut ns: [Vec<f64>; 4] = Default::default();
        let (mut r_table, mut r_closed) = (Vec::new(), Vec::new());
        for _ in 0..reps {
            let a = time(|| line(kind, &table)) / steps * 1e9;
            let b = time(|| surface(kind, &grid2)) / (2.0 * steps) * 1e9;
            let c = time(|| line(kind, &closed)) / steps * 1e9;
            let d = time(|| surface(kind, &exact2)) / (2.0 * steps) * 1e9;
            for (v, x) in ns.iter_mut().zip([a, b, c, d]) {
                v.push(x);
            }
            r_table.push(b / a);
            r_closed.push(d / c);
        }
        let [a, b, c, d] = ns.map(median);
        println!(
            "{name:<8} {a:>12.2} {b:>12.2} {:>12.2} {c:>12.2} {d:>12.2} {:>12.2}",
            median(r_table),
            median(r_closed)
        );
    }
}
