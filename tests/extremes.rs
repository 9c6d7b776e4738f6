//! Extremes: barriers from 0.1 to 200 kT, frictions from 1e-4 to 1e4 ω_b (theory and short
//! simulations), profiles of 10 and 10^6 rows. No NaN, no overflow, the right warnings and
//! refusals (common practice, no source).

use escapade::scenario::{Model, Override};
use escapade::simulate::{Plan, RunOptions, run_ensemble};
use escapade::stats::summarise;
use escapade::theory;
use std::path::Path;
use std::sync::atomic::AtomicBool;

/// The simulation plan of a scenario, as the commands build it.
fn plan_of(
    m: &Model,
    t: &escapade::theory::TheoryReport,
) -> Result<Plan, escapade::simulate::SimError> {
    let settings = m.simulation.clone().unwrap_or_default();
    Plan::new(&m.system, &settings, &m.units.names.time, t)
}

const DW: &str = "[particle]\nmass = 1.0\nfriction = 1.0\n[potential]\nfamily = \"double-well\"\nbarrier = 5.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n";

fn model(sets: &[&str]) -> Model {
    let o: Vec<Override> = sets.iter().map(|s| Override::parse(s).unwrap()).collect();
    Model::from_text(DW, "x", Path::new("."), &o).unwrap()
}

fn all_rates_finite(t: &theory::TheoryReport) {
    let r = &t.rates;
    for k in [
        r.tst,
        r.tst_exact,
        r.kramers,
        r.smoluchowski,
        r.energy_diffusion,
        r.turnover,
        r.pgh,
        r.mfpt,
    ]
    .into_iter()
    .flatten()
    {
        assert!(k.is_finite() && k > 0.0, "{k}");
    }
}

#[test]
fn tiny_and_huge_barriers() {
    let t = theory::analyse(&model(&["potential.barrier=0.1"]).system).unwrap();
    all_rates_finite(&t);
    assert!(
        t.regime
            .warnings
            .iter()
            .any(|w| w.contains("no separation of time scales"))
    );
    // below 5 kT only the exact MFPT can be trusted (and only when overdamped)
    assert!(t.regime.trusted.iter().all(|k| *k == theory::RateKey::Mfpt));
    let m = model(&["potential.barrier=200"]);
    let t = theory::analyse(&m.system).unwrap();
    all_rates_finite(&t);
    assert!(t.mfpt.ln_time > 190.0 && t.mfpt.ln_time < 210.0);
    // brute force asked for explicitly is refused, naming the cost and FFS
    let m = model(&["potential.barrier=200", "simulation.method=brute-force"]);
    let t = theory::analyse(&m.system).unwrap();
    let e = plan_of(&m, &t).unwrap_err().to_string();
    assert!(e.contains("refused") && e.contains("ffs"), "{e}");
}

#[test]
fn frictions_over_eight_decades_in_theory_and_short_simulations() {
    // ω_b = sqrt(4·5) for this well
    let wb = 20f64.sqrt();
    for ratio in [1e-4, 1e-2, 1.0, 1e2, 1e4] {
        let g = format!("particle.friction={:?}", ratio * wb);
        let m = model(&[&g]);
        let t = theory::analyse(&m.system).unwrap();
        all_rates_finite(&t);
        // a short censored run: no NaN anywhere, underdamped with an explicit dynamics
        let m = model(&[
            &g,
            "simulation.dynamics=underdamped",
            "simulation.trajectories=16",
            "simulation.max_time=2.0",
        ]);
        let t = theory::analyse(&m.system).unwrap();
        let plan = plan_of(&m, &t).unwrap();
        let r = run_ensemble(
            &plan,
            &RunOptions::default(),
            &AtomicBool::new(false),
            |_, _| {},
        )
        .unwrap();
        let s = summarise(&r.outcomes, plan.params.dt, plan.params.max_steps);
        assert_eq!(s.trajectories, 16);
        assert!(s.rate.is_finite() && s.rate_ci95.iter().all(|v| !v.is_nan()));
    }
    // a time step larger than the landscape's default draws a warning
    let m = model(&[
        "simulation.dt=0.5",
        "simulation.trajectories=4",
        "simulation.max_time=1",
    ]);
    let t = theory::analyse(&m.system).unwrap();
    let plan = plan_of(&m, &t).unwrap();
    assert!(
        plan.warnings
            .iter()
            .any(|w| w.contains("larger than the default"))
    );
}

fn table_of(rows: usize) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("escapade-ext-{}-{rows}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut text = String::from("x,U\n");
    for i in 0..rows {
        let x = -2.0 + 4.0 * i as f64 / (rows - 1) as f64;
        text.push_str(&format!("{x:.12},{:.12}\n", 5.0 * (x * x - 1.0).powi(2)));
    }
    std::fs::write(dir.join("t.csv"), text).unwrap();
    std::fs::write(
        dir.join("s.toml"),
        "[particle]\nmass = 1.0\nfriction = 1.0\n[potential]\ntable = \"t.csv\"\n[states]\nstart = -1.0\n",
    )
    .unwrap();
    dir
}

#[test]
fn profiles_of_ten_and_a_million_rows() {
    // 10 rows: coarse, but analysed, with the coarse-profile warning
    let d = table_of(10);
    let m = Model::load(&d.join("s.toml"), &[]).unwrap();
    let t = theory::analyse(&m.system).unwrap();
    all_rates_finite(&t);
    assert!(t.regime.warnings.iter().any(|w| w.contains("too coarse")));
    let _ = std::fs::remove_dir_all(&d);
    // 10^6 rows: the spline's MFPT equals the exact one of the smooth profile (dw5 shape on
    // [-2, 2], reflecting at -2) to the quadrature tolerance
    let d = table_of(1_000_000);
    let m = Model::load(&d.join("s.toml"), &[]).unwrap();
    let t = theory::analyse(&m.system).unwrap();
    let exact = Model::from_text(
        "[particle]\nmass = 1.0\nfriction = 1.0\n[potential]\nexpr = \"5*(x^2-1)^2\"\ndomain = [-2.0, 2.0]\n[states]\nstart = -1.0\n",
        "e",
        Path::new("."),
        &[],
    )
    .unwrap();
    let te = theory::analyse(&exact.system).unwrap();
    assert!((t.mfpt.ln_time - te.mfpt.ln_time).abs() < 1e-6);
    let _ = std::fs::remove_dir_all(&d);
}
