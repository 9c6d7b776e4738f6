//! Study of the well lattice bias of the propagator D(x) (src/observe/propagator.rs): a deep
//! double well U = E_b((x/a)² − 1)² (a = 1, kT = 1; well curvature 8E_b, so F''Δx²/4 is large
//! with 30 bins), constant D = 1 and a D ramp 1.5 + x/4, simulated over several seeds. Each
//! trajectory goes through the passes of `observe` (histogram U), then D(x) is fitted on 30 fixed
//! bins and on the automatic bin count (`counts::place_bins`), at the lag `observe` reports.
//! Printed per method and profile: coverage of the truth by the 95% intervals and the median
//! relative error of the posterior median, at the two wells and at the barrier.
//!
//! Usage: cargo run --release --example deep_well_diffusion -- [E_B] [DURATION] [SEEDS]
//! (defaults 8 kT, 20000 time units, 10 seeds; one trajectory per seed and profile).

use escapade::observe::counts::{self, Diffusion, LagCounter};
use escapade::observe::propagator::BayesSettings;
use escapade::observe::{self, Options, Sink, read::Source};
use escapade::seed;
use rand::RngExt;
use rand_distr::StandardNormal;
use std::time::Instant;

/// Integrator step: Euler–Maruyama raises D in a well by about D U'' dt (1.3% at 8 kT with the
/// ramp's D = 1.25 at the left well... see the report), small beside the lattice bias studied.
const DT: f64 = 1e-4;
/// Steps per frame (a sampling interval of 0.005).
const EVERY: usize = 50;

type Profile = fn(f64) -> (f64, f64);

fn constant(_: f64) -> (f64, f64) {
    (1.0, 0.0)
}

fn ramp(x: f64) -> (f64, f64) {
    (1.5 + x / 4.0, 0.25)
}

/// Itô Euler–Maruyama for dx = (−D U' + D') dt + √(2D) dW, reflected at ±3, every `EVERY` steps.
fn trajectory(eb: f64, duration: f64, seed: u64, d: Profile) -> Vec<f64> {
    let mut rng = seed::stream(seed, 0);
    let frames = (duration / (DT * EVERY as f64)) as usize;
    let mut x = -1.0;
    let mut out = Vec::with_capacity(frames);
    for _ in 0..frames {
        for _ in 0..EVERY {
            let (dx, ddx) = d(x);
            let force = -4.0 * eb * x * (x * x - 1.0);
            let z: f64 = rng.sample(StandardNormal);
            x += (dx * force + ddx) * DT + (2.0 * dx * DT).sqrt() * z;
            if x > 3.0 {
                x = 6.0 - x;
            } else if x < -3.0 {
                x = -6.0 - x;
            }
        }
        out.push(x);
    }
    out
}

/// D(x) on `requested` bins (None: automatic) at the lag `observe` reports.
fn fit(fe: &observe::FreeEnergy, x: &[f64], requested: Option<usize>) -> Diffusion {
    let (bins, rule) = counts::place_bins(fe, requested).unwrap();
    let mut c = LagCounter::new(bins, &counts::DEFAULT_LAGS);
    c.feed(x);
    c.end(DT * EVERY as f64);
    Diffusion::new(&c, &BayesSettings::default(), rule).unwrap()
}

/// (covered, relative error) at the interface nearest each of the wells and the barrier.
fn check(d: &Diffusion, truth: Profile) -> Vec<(bool, f64)> {
    [-1.0, 0.0, 1.0]
        .iter()
        .map(|&x0| {
            let r = d
                .interfaces
                .iter()
                .min_by(|a, b| (a.x - x0).abs().total_cmp(&(b.x - x0).abs()))
                .unwrap();
            let t = truth(r.x).0;
            (r.ci95[0] <= t && t <= r.ci95[1], r.d / t - 1.0)
        })
        .collect()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        (v[n / 2 - 1] + v[n / 2]) / 2.0
    }
}

fn main() {
    let arg = |i: usize, default: f64| {
        std::env::args()
            .nth(i)
            .map_or(default, |s| s.parse().expect("a number"))
    };
    let (eb, duration, seeds) = (arg(1, 8.0), arg(2, 20000.0), arg(3, 10.0) as u64);
    println!(
        "double well E_b = {eb} kT, well U'' = {}, {duration} time units per seed",
        8.0 * eb
    );
    for (name, d) in [("constant", constant as Profile), ("ramp", ramp as Profile)] {
        // per method: per place (left well, barrier, right well): (covered, rel. error) per seed
        let mut rows: Vec<Vec<Vec<(bool, f64)>>> = vec![vec![Vec::new(); 3]; 2];
        let mut info = vec![Vec::new(); 2];
        for s in 1..=seeds {
            let t0 = Instant::now();
            let x = trajectory(eb, duration, 500 + s, d);
            let src = [Source::Samples {
                name: format!("seed {s}"),
                values: x.clone(),
                dt: DT * EVERY as f64,
            }];
            let rep = observe::analyse(&src, &Options::default()).unwrap();
            let t1 = Instant::now();
            for (m, requested) in [Some(counts::DEFAULT_BINS), None].into_iter().enumerate() {
                let t = Instant::now();
                let r = fit(&rep.free_energy, &x, requested);
                for (p, c) in check(&r, d).into_iter().enumerate() {
                    rows[m][p].push(c);
                }
                info[m].push(format!(
                    "{} bins, lag {} ({:.1} s)",
                    r.bins.count,
                    r.lag_frames,
                    t.elapsed().as_secs_f64()
                ));
            }
            eprintln!(
                "{name} seed {s}: simulated in {:.1} s, {} crossings of 0 ; 30: {} ; auto: {}",
                (t1 - t0).as_secs_f64(),
                x.windows(2).filter(|w| w[0] * w[1] < 0.0).count(),
                info[0].last().unwrap(),
                info[1].last().unwrap()
            );
        }
        for (m, label) in ["30 bins", "automatic"].iter().enumerate() {
            let cells: Vec<String> = ["left well", "barrier", "right well"]
                .iter()
                .enumerate()
                .map(|(p, place)| {
                    let v = &rows[m][p];
                    format!(
                        "{place}: {}/{} covered, median rel. error {:+.1}%",
                        v.iter().filter(|c| c.0).count(),
                        v.len(),
                        100.0 * median(v.iter().map(|c| c.1).collect())
                    )
                })
                .collect();
            println!("{name:8} {label:9} | {}", cells.join(" | "));
        }
    }
}
