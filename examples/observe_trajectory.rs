//! Writes an invented trajectory for `escapade observe` (see examples/observe_demo.sh): one
//! overdamped particle in the double well U = E_b((x/a)² − 1)² (reduced units, kT = 1, D = 1),
//! run by the tool's own Euler–Maruyama integrator, printed as "t,x" lines on stdout.
//!
//! Usage: cargo run --release --example observe_trajectory -- [E_B] [DURATION] [SEED]
//! (defaults 3.5 kT, 2000 time units, seed 1; sampled every 0.01).

use escapade::potential::Family;
use escapade::simulate::engine::{Kind, Params, Start, sample_path};
use escapade::simulate::force::ConstD;
use std::io::Write;

/// Integrator step: the Euler–Maruyama density is off by O(D dt U''), 0.6% in the wells here.
const DT: f64 = 2e-4;
/// Steps between printed samples (a sampling interval of 0.01).
const EVERY: u64 = 50;

fn main() {
    let arg = |i: usize, default: f64| {
        std::env::args()
            .nth(i)
            .map_or(default, |s| s.parse().expect("a number"))
    };
    let (eb, duration, seed) = (arg(1, 3.5), arg(2, 2000.0), arg(3, 1.0) as u64);
    let well = Family::DoubleWell {
        eb,
        a: 1.0,
        domain: (-3.0, 3.0),
    };
    let p = Params {
        kind: Kind::EulerMaruyama,
        dt: DT,
        max_steps: u64::MAX,
        seed,
        target: f64::INFINITY,
        dir: 1.0,
        lo: -3.0,
        hi: 3.0,
        mass: 1.0,
        gamma: 1.0,
        memory_time: 0.0,
        start: Start::At(-1.0),
    };
    let steps = (duration / DT).round() as u64;
    let path = sample_path(&p, &well, &ConstD(1.0), 0, -1.0, steps, EVERY);
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    let _ = writeln!(
        out,
        "# invented: overdamped double well, E_b = {eb} kT, D = 1, seed {seed}"
    );
    let _ = writeln!(out, "t,x");
    for (i, (x, _)) in path.iter().enumerate() {
        let _ = writeln!(out, "{},{x:.6}", (i as u64 + 1) as f64 * DT * EVERY as f64);
    }
}
