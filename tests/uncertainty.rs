//! Propagation of a profile's σ_U into E_b and the rates (src/uncertainty.rs), on invented
//! tabulated double wells written to a temporary folder.

use escapade::scenario::Model;
use escapade::uncertainty::{
    Interval, UncertaintyError, UncertaintyOptions, UncertaintyReport, propagate,
};
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};

static COUNTER: AtomicUsize = AtomicUsize::new(0);

/// Writes a table (x, U, σ_U) in kT into a fresh temporary folder and loads `particle` with it.
fn model(name: &str, particle: &str, start: f64, rows: &[(f64, f64, f64)]) -> Model {
    model_with(name, particle, start, rows, true)
}

fn model_with(
    name: &str,
    particle: &str,
    start: f64,
    rows: &[(f64, f64, f64)],
    with_sigma: bool,
) -> Model {
    let dir: PathBuf = std::env::temp_dir().join(format!(
        "escapade-uncertainty-{}-{}-{name}",
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    std::fs::create_dir_all(&dir).unwrap();
    let mut csv = String::from(if with_sigma { "x,U,sigma_U\n" } else { "x,U\n" });
    for (x, u, s) in rows {
        csv.push_str(&format!("{x:.17e},{u:.17e}"));
        if with_sigma {
            csv.push_str(&format!(",{s:.17e}"));
        }
        csv.push('\n');
    }
    std::fs::write(dir.join("profile.csv"), csv).unwrap();
    let text = format!(
        "[particle]\n{particle}\n[potential]\ntable = \"profile.csv\"\n[states]\nstart = {start}\n"
    );
    let m = Model::from_text(&text, "scenario.toml", &dir, &[]).unwrap();
    std::fs::remove_dir_all(&dir).ok();
    m
}

/// Invented quartic double well 8 (x² − 1)² kT on [−2, 2], 401 rows, uniform σ_U.
fn quartic(sigma: f64) -> Model {
    let rows: Vec<(f64, f64, f64)> = (0..=400)
        .map(|i| {
            let x = -2.0 + f64::from(i) * 0.01;
            (x, 8.0 * (x * x - 1.0).powi(2), sigma)
        })
        .collect();
    // mass and friction: every rate key applies (well_to_well through the product well)
    model("quartic", "mass = 1.0\nfriction = 2.0", -1.0, &rows)
}

fn run(m: &Model, draws: usize, ell: Option<f64>, seed: u64) -> UncertaintyReport {
    let opts = UncertaintyOptions {
        draws,
        correlation_length: ell,
        seed,
    };
    propagate(&m.system, &opts).unwrap().unwrap()
}

fn collapsed(i: &Interval, tol: f64) -> bool {
    let c = i.central;
    let dev = [i.median, i.ci68[0], i.ci68[1], i.ci95[0], i.ci95[1]]
        .iter()
        .map(|v| ((v - c) / c).abs())
        .fold(0.0, f64::max);
    eprintln!("{}: largest relative deviation {dev:.1e}", i.key);
    let close = |v: f64| ((v - c) / c).abs() < tol;
    close(i.median) && i.ci68.iter().chain(&i.ci95).all(|&v| close(v))
}

// σ_U = 0: every draw re-analyses a table rebuilt from identical knot values, so the draws repeat
// the central computation; the only difference is the ln/exp round trip and the reflection 2θ̂ − q
// of the interval (a few ulps), hence 1e-12 (self-consistency, no external source).
#[test]
fn zero_sigma_collapses_every_interval() {
    let m = quartic(0.0);
    let r = run(&m, 40, None, 3);
    assert_eq!(r.failed, 0);
    // an interval for every rate the central analysis gives, in catalogue order
    let central = escapade::theory::analyse(&m.system).unwrap();
    let want: Vec<&str> = escapade::theory::catalogue::CATALOGUE
        .iter()
        .filter(|f| central.rates.get(f.key).is_some())
        .map(|f| f.key.as_str())
        .collect();
    let keys: Vec<&str> = r.rates.iter().map(|i| i.key).collect();
    assert_eq!(keys, want);
    assert!(keys.contains(&"mfpt") && keys.contains(&"pgh"));
    for i in r.rates.iter().chain([&r.barrier]) {
        assert!(collapsed(i, 1e-12), "{i:?}");
    }
    assert!(r.barrier_share.is_none() && r.prefactor_share.is_none());
}

// With a memory time the draws use the same model as the central value: Grote–Hynes gets an
// interval and PGH is the memory version, so σ_U = 0 still collapses every interval onto the
// central value (1e-12 as above); a draw without the memory would put PGH 33% low here.
#[test]
fn memory_friction_draws_match_the_central_model() {
    let rows: Vec<(f64, f64, f64)> = (0..=400)
        .map(|i| {
            let x = -2.0 + f64::from(i) * 0.01;
            (x, 8.0 * (x * x - 1.0).powi(2), 0.0)
        })
        .collect();
    let m = model(
        "quartic-memory",
        "mass = 1.0\nfriction = 8.0\nmemory_time = 0.5",
        -1.0,
        &rows,
    );
    let r = run(&m, 40, None, 3);
    assert_eq!(r.failed, 0);
    let keys: Vec<&str> = r.rates.iter().map(|i| i.key).collect();
    assert!(
        keys.contains(&"grote_hynes") && keys.contains(&"pgh"),
        "{keys:?}"
    );
    for i in &r.rates {
        assert!(collapsed(i, 1e-12), "{i:?}");
    }
}

// ℓ far larger than the table with uniform σ_U: every knot moves by the same δU (the kernel is
// exactly 1 everywhere), and rates depend only on differences of U, so nothing changes but
// rounding: U + c loses up to ε·max|U| ≈ 1.6e-14 kT per knot, which the spline and the quadratures
// carry into ln k at the 1e-12 level at most; 1e-10 leaves a margin (self-consistency).
#[test]
fn fully_correlated_shift_leaves_rates_unchanged() {
    let m = quartic(0.3);
    let r = run(&m, 40, Some(1e9), 5);
    assert_eq!(r.failed, 0);
    assert_eq!(r.rates.len(), 9);
    for i in &r.rates {
        assert!(collapsed(i, 1e-10), "{i:?}");
    }
    // E_b is a difference of two values of U: absolute rounding, relative to E_b = 8 kT
    assert!(collapsed(&r.barrier, 1e-10), "{:?}", r.barrier);
}

/// Invented well–barrier–well profile with narrow features far apart (kT):
/// U = −10 e^(−x²/2) + 10 e^(−(x−20)²/2) − 10 e^(−(x−40)²/2) on [−10, 50], 1201 rows, σ_U = σ.
fn separated(sigma: f64) -> Model {
    let g = |x: f64, c: f64| (-(x - c) * (x - c) / 2.0).exp();
    let rows: Vec<(f64, f64, f64)> = (0..=1200)
        .map(|i| {
            let x = -10.0 + f64::from(i) * 0.05;
            (
                x,
                -10.0 * g(x, 0.0) + 10.0 * g(x, 20.0) - 10.0 * g(x, 40.0),
                sigma,
            )
        })
        .collect();
    model("separated", "diffusion = 1.0", 0.0, &rows)
}

// Analytic shift. Source: the Laplace approximation of PHYSICS.md §6, derived here. With the well
// and barrier-top widths s = sqrt(kT/|U''|) = 1/sqrt(10) = 0.32 ≪ ℓ = 2.5 ≪ |x_b − x_a| = 20,
// T ≈ (1/D) ∫ e^{U} dy ∫ e^{−U} dz is dominated by Gaussian windows at x_b and x_a over which δU is
// nearly constant, so ln(1/T) shifts by δU(x_a) − δU(x_b); the two are independent (correlation
// exp(−d²/(4ℓ²)) = e^{−16}) with standard deviation σ each, so ln k ~ N(ln k0, 2σ²).
// Allowance for the approximation: averaging δU over the windows scales its standard deviation by
// (1 + s²/ℓ²)^{−1/4} = 0.996, and curvature changes δU'' s² ~ σ s²/ℓ² add ~1% of σ; the flat parts
// of the profile weigh ~0.2% in each integral. Allowance 2% of the prediction.
// Sampling: a sample standard deviation of N normals has standard error s/sqrt(2N); 4 of them.
#[test]
fn analytic_shift_of_ln_mfpt_rate() {
    let sigma = 0.3;
    let n = 400;
    let m = separated(sigma);
    let r = run(&m, n, Some(2.5), 11);
    assert_eq!(r.failed, 0, "{:?}", r.warnings);
    let want = 2f64.sqrt() * sigma;
    let k = r.rates.iter().find(|i| i.key == "mfpt").unwrap();
    // the sample standard deviation of ln k, rebuilt from the draws' ln k is not in the report:
    // use the decomposition's var(ln k)
    let d = r.decompositions.iter().find(|d| d.key == "mfpt").unwrap();
    let sd = d.var_ln_k.sqrt();
    let tol = 4.0 * want / (2.0 * n as f64).sqrt() + 0.02 * want;
    eprintln!(
        "sd ln k = {sd:.4} (predicted {want:.4} ± {tol:.4}); barrier share {:?}, prefactor {:?}, cov {:?}",
        d.barrier_share, d.prefactor_share, d.covariance_share
    );
    assert!((sd - want).abs() < tol, "sd {sd} vs {want} ± {tol}");
    // 95% interval of ln k: width 2·1.96·sqrt(2)σ; each endpoint of a percentile interval from N
    // draws has standard error sqrt(p(1−p)/N)/φ(1.96) = 0.134 sd, so the width has ~0.19 sd; 4 of
    // them plus the 2% allowance.
    let width = (k.ci95[1] / k.ci95[0]).ln();
    let want_w = 2.0 * 1.96 * want;
    let tol_w = 4.0 * 0.19 * want + 0.02 * want_w;
    eprintln!("95% width of ln k = {width:.4} (predicted {want_w:.4} ± {tol_w:.4})");
    assert!((width - want_w).abs() < tol_w, "{width} vs {want_w}");
    // the draws' median of ln k stays at ln k0, and so does the bias-corrected estimate
    // 2 ln k0 − (that median): standard error of a normal median 1.2533 sd/sqrt(N), 4 of them; the
    // second-order (Jensen) bias σ² s²/ℓ² ≈ 1.4e-3 is far smaller.
    let shift = (k.draws_median / k.central).ln();
    assert!(((k.median / k.central).ln() + shift).abs() < 1e-12);
    let tol_m = 4.0 * 1.2533 * want / (n as f64).sqrt();
    eprintln!("median ln k - ln k0 = {shift:.4} (± {tol_m:.4})");
    assert!(shift.abs() < tol_m, "{shift}");
    // E_b = U(x_b) − U(x_a) moves by δU(x_b) − δU(x_a) at the stationary points, the same
    // difference as ln k up to the window averaging, so the barrier carries almost all of var(ln k):
    // ln k + E_b varies through curvature changes ~σ s²/ℓ² (about 2% of σ), whose variance share is
    // of order 1e-3, plus the window-averaging difference; 0.05 allows both with a wide margin.
    let b = d.barrier_share.unwrap();
    assert!((b - 1.0).abs() < 0.05, "barrier share {b}");
    assert!(d.prefactor_share.unwrap() < 0.05);
}

// Determinism: draw k uses seed::stream(seed, k) and results are collected in draw order, so the
// report is identical for any thread count (the project's reproducibility rule, DEVELOPERS.md).
#[test]
fn same_seed_same_report_for_one_and_two_threads() {
    let m = quartic(0.1);
    let with = |threads: usize, seed: u64| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| serde_json::to_string(&run(&m, 40, None, seed)).unwrap())
    };
    let one = with(1, 21);
    assert_eq!(one, with(2, 21));
    assert_ne!(one, with(2, 22));
}

#[test]
fn no_sigma_column_or_no_table_gives_none_and_bad_options_name_keys() {
    let fam = Model::from_text(
        "[particle]\ndiffusion = 1.0\n[potential]\nfamily = \"double-well\"\nbarrier = 5.0\nhalf_width = 1.0\n",
        "s.toml",
        std::path::Path::new("."),
        &[],
    )
    .unwrap();
    assert!(
        propagate(&fam.system, &UncertaintyOptions::default())
            .unwrap()
            .is_none()
    );
    let rows: Vec<(f64, f64, f64)> = (0..=40)
        .map(|i| {
            let x = -2.0 + f64::from(i) * 0.1;
            (x, 8.0 * (x * x - 1.0).powi(2), 0.0)
        })
        .collect();
    let plain = model_with("plain", "diffusion = 1.0", -1.0, &rows, false);
    assert!(
        propagate(&plain.system, &UncertaintyOptions::default())
            .unwrap()
            .is_none()
    );
    let m = quartic(0.1);
    let bad = |draws: usize, ell: Option<f64>| {
        propagate(
            &m.system,
            &UncertaintyOptions {
                draws,
                correlation_length: ell,
                seed: 1,
            },
        )
        .unwrap_err()
    };
    let e = bad(10, None);
    assert!(matches!(e, UncertaintyError::TooFewDraws { .. }));
    assert_eq!(e.key(), "uncertainty.draws");
    assert_eq!(bad(100, Some(-1.0)).key(), "uncertainty.correlation_length");
    assert_eq!(
        bad(100, Some(f64::NAN)).key(),
        "uncertainty.correlation_length"
    );
}

// The shipped example table (invented ion-pair PMF with a sigma_U column): every draw is analysed
// and the exact 1/MFPT, which averages the knot noise over the thermal windows, keeps its
// unperturbed value inside the draws' 95% spread, hence inside the reflected interval
// (self-consistency, no external source).
#[test]
fn example_table_propagates() {
    let m = Model::load(std::path::Path::new("examples/pmf_table.toml"), &[]).unwrap();
    let r = run(&m, 100, None, 1);
    assert_eq!(r.failed, 0);
    let keys: Vec<&str> = r.rates.iter().map(|i| i.key).collect();
    assert_eq!(keys, ["smoluchowski", "mfpt"]);
    let k = &r.rates[1];
    assert!(k.ci95[0] <= k.central && k.central <= k.ci95[1], "{k:?}");
    assert!(k.ci95[0] <= k.ci68[0] && k.ci68[0] <= k.median && k.median <= k.ci68[1]);
    // the basic interval is the draws' spread reflected about k0 in ln k: k0²/q (rounding of the
    // ln/exp round trip, 1e-12)
    let c2 = k.central * k.central;
    assert!(
        (k.ci95[0] * k.draws_ci95[1] / c2 - 1.0).abs() < 1e-12,
        "{k:?}"
    );
    assert!(
        (k.ci95[1] * k.draws_ci95[0] / c2 - 1.0).abs() < 1e-12,
        "{k:?}"
    );
    eprintln!("{}", serde_json::to_string(&r).unwrap());
}
