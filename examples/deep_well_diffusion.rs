//! Study of the well lattice bias of the propagator D(x) (src/observe/propagator.rs): the deep
//! double well of tests/deep_well (U = E_b((x/a)² − 1)², a = 1, kT = 1, well curvature 8E_b, so
//! F''Δx²/4 is large on 30 bins), constant D = 1 and the ramp D = 1.5 + x/4, over several seeds.
//! Each trajectory goes through the histogram pass of `observe`, then D(x) is fitted on 30 bins
//! with the plain lattice (the method before the correction), on 30 bins with the lattice
//! correction, and on the automatic bin count (`counts::place_bins`) with the correction, each
//! at the lag `observe` reports. Printed: coverage of the truth by the 95% intervals and the
//! median relative error of the posterior median at the two wells and at the barrier.
//!
//! Usage: cargo run --release --example deep_well_diffusion -- [E_B] [DURATION] [SEEDS]
//! (defaults 8 kT, 4000 time units, 10 seeds; one trajectory per seed and profile).

#[path = "../tests/deep_well/mod.rs"]
mod deep_well;

use deep_well::{Profile, check, constant, fit, histogram, ramp, trajectory};
use escapade::observe::counts;

/// (label, bins asked for (None: automatic), lattice correction)
const METHODS: [(&str, Option<usize>, bool); 3] = [
    ("30 bins, plain", Some(counts::DEFAULT_BINS), false),
    ("30 bins, corrected", Some(counts::DEFAULT_BINS), true),
    ("auto bins, corrected", None, true),
];

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    (v[(n - 1) / 2] + v[n / 2]) / 2.0
}

fn main() {
    let arg = |i: usize, default: f64| {
        std::env::args()
            .nth(i)
            .map_or(default, |s| s.parse().expect("a number"))
    };
    let (eb, duration, seeds) = (arg(1, 8.0), arg(2, 4000.0), arg(3, 10.0) as u64);
    println!(
        "double well E_b = {eb} kT, well U'' = {}, {duration} time units per seed",
        8.0 * eb
    );
    for (name, d) in [("constant", constant as Profile), ("ramp", ramp as Profile)] {
        // per method, per place (left well, barrier, right well): (covered, rel. error) per seed
        let mut rows = vec![vec![Vec::new(); 3]; METHODS.len()];
        for s in 1..=seeds {
            let x = trajectory(eb, duration, 500 + s, d);
            let fe = histogram(&x);
            let mut info = Vec::new();
            for (m, &(_, requested, correct)) in METHODS.iter().enumerate() {
                let r = fit(&fe, &x, requested, correct);
                for (p, c) in check(&r, d).into_iter().enumerate() {
                    rows[m][p].push(c);
                }
                info.push(format!("{} bins, lag {}", r.bins.count, r.lag_frames));
            }
            eprintln!("{name} seed {s}: {}", info.join(" ; "));
        }
        for (m, (label, _, _)) in METHODS.iter().enumerate() {
            let cells: Vec<String> = ["left well", "barrier", "right well"]
                .iter()
                .enumerate()
                .map(|(p, place)| {
                    let v: &Vec<(bool, f64)> = &rows[m][p];
                    format!(
                        "{place}: {}/{} covered, median error {:+.1}%",
                        v.iter().filter(|c| c.0).count(),
                        v.len(),
                        100.0 * median(v.iter().map(|c| c.1).collect())
                    )
                })
                .collect();
            println!("{name:8} {label:20} | {}", cells.join(" | "));
        }
    }
}
