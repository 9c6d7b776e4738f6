//! The deep double well of examples/deep_well_diffusion.rs (the lattice-bias study):
//! U = E_b((x/a)² − 1)² with a = 1, kT = 1 (well curvature 8E_b, barrier curvature −4E_b),
//! simulated by Itô Euler–Maruyama and fitted the way `observe --diffusion` does.
#![allow(dead_code)]

use escapade::observe::counts::{self, Diffusion, LagCounter};
use escapade::observe::propagator::BayesSettings;
use escapade::observe::{self, Options, Sink, read::Source};
use escapade::seed;
use rand::RngExt;
use rand_distr::StandardNormal;

/// Integrator step: Euler–Maruyama raises D in a well by about D U'' dt, 0.6% for D = 1 at
/// 8 kT (U'' = 64), small beside the 95% intervals.
pub const DT: f64 = 1e-4;
/// Steps per frame (a sampling interval of 0.005).
pub const EVERY: usize = 50;
/// The sampling interval.
pub const FRAME: f64 = DT * EVERY as f64;

/// D(x) and D'(x).
pub type Profile = fn(f64) -> (f64, f64);

/// D = 1.
pub fn constant(_: f64) -> (f64, f64) {
    (1.0, 0.0)
}

/// D rising from 1.25 at the left well to 1.75 at the right one.
pub fn ramp(x: f64) -> (f64, f64) {
    (1.5 + x / 4.0, 0.25)
}

/// dx = (−D U' + D') dt + √(2D) dW from the left well, reflected at ±3, every `EVERY` steps.
pub fn trajectory(eb: f64, duration: f64, seed: u64, d: Profile) -> Vec<f64> {
    let mut rng = seed::stream(seed, 0);
    let frames = (duration / FRAME) as usize;
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

/// The histogram U of `observe` (passes 1 and 2).
pub fn histogram(x: &[f64]) -> observe::FreeEnergy {
    let src = [Source::Samples {
        name: "deep well".into(),
        values: x.to_vec(),
        dt: FRAME,
    }];
    observe::analyse(&src, &Options::default())
        .unwrap()
        .free_energy
}

/// D(x) on `requested` bins (None: automatic), with or without the lattice correction, at the
/// lag `observe` reports (lags 1, 2, 5, 10 frames).
pub fn fit(
    fe: &observe::FreeEnergy,
    x: &[f64],
    requested: Option<usize>,
    correct: bool,
) -> Diffusion {
    let (bins, rule) = counts::place_bins(fe, requested).unwrap();
    let mut c = LagCounter::new(bins, &counts::DEFAULT_LAGS);
    c.feed(x);
    c.end(FRAME);
    let settings = BayesSettings {
        lattice_correction: correct,
        ..BayesSettings::default()
    };
    Diffusion::new(&c, &settings, rule).unwrap()
}

/// (covered by the 95% interval, relative error of the median) at the interfaces nearest the
/// left well, the barrier and the right well.
pub fn check(d: &Diffusion, truth: Profile) -> [(bool, f64); 3] {
    [-1.0, 0.0, 1.0].map(|x0: f64| {
        let r = d
            .interfaces
            .iter()
            .min_by(|a, b| (a.x - x0).abs().total_cmp(&(b.x - x0).abs()))
            .unwrap();
        let t = truth(r.x).0;
        (r.ci95[0] <= t && t <= r.ci95[1], r.d / t - 1.0)
    })
}
