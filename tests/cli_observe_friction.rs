//! `escapade observe --velocity/--friction` (friction and memory from velocities) and
//! `observe --spring` (D from restrained windows) through the binary, on trajectories generated
//! here from fixed-seed streams (`escapade::seed::stream`). Tolerances: about 4 standard errors
//! plus the stated discretisation biases.

mod common;
use common::{json, run};

use escapade::observe::velocity::fd_factor;
use escapade::seed;
use rand::RngExt;
use rand_distr::StandardNormal;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

/// Free Langevin particle, (x, v) advanced exactly over h: v' = v e^{−γh} + ..., x' = x +
/// v (1 − e^{−γh})/γ + ..., noise variances (kT/(mγ²))(2γh − 3 + 4e^{−γh} − e^{−2γh}) and
/// (kT/m)(1 − e^{−2γh}), covariance (kT/(mγ))(1 − e^{−γh})² (Chandrasekhar, Rev. Mod. Phys. 15,
/// 1 (1943), ch. II). kT = 1.
fn free_particle(m: f64, g: f64, h: f64, n: usize, s: u64) -> (Vec<f64>, Vec<f64>) {
    let e = (-g * h).exp();
    let vxx = (2.0 * g * h - 3.0 + 4.0 * e - e * e) / (m * g * g);
    let vvv = (1.0 - e * e) / m;
    let cxv = (1.0 - e).powi(2) / (m * g);
    let l00 = vxx.sqrt();
    let l10 = cxv / l00;
    let l11 = (vvv - l10 * l10).sqrt();
    let mut rng = seed::stream(s, 0);
    let mut gauss = move || rng.sample::<f64, _>(StandardNormal);
    let (mut x, mut v) = (0.0, gauss() / m.sqrt());
    let (mut xs, mut vs) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for _ in 0..n {
        let (r0, r1) = (gauss(), gauss());
        x += v * (1.0 - e) / g + l00 * r0;
        v = e * v + l10 * r0 + l11 * r1;
        xs.push(x);
        vs.push(v);
    }
    (xs, vs)
}

/// Underdamped particle in U = E_b (x² − 1)² (kT = 1, m = 1) by BAOAB (Leimkuhler & Matthews,
/// Appl. Math. Res. Express 2013, 34), step `h`, sampled every `every` steps.
fn double_well(eb: f64, g: f64, h: f64, every: usize, n: usize, s: u64) -> (Vec<f64>, Vec<f64>) {
    let force = |x: f64| -4.0 * eb * x * (x * x - 1.0);
    let c = (-g * h).exp();
    let sc = (1.0 - c * c).sqrt();
    let mut rng = seed::stream(s, 0);
    let (mut x, mut v) = (-1.0, 0.0);
    let mut f = force(x);
    let (mut xs, mut vs) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for k in 1..=n * every {
        v += 0.5 * h * f;
        x += 0.5 * h * v;
        v = c * v + sc * rng.sample::<f64, _>(StandardNormal);
        x += 0.5 * h * v;
        f = force(x);
        v += 0.5 * h * f;
        if k % every == 0 {
            xs.push(x);
            vs.push(v);
        }
    }
    (xs, vs)
}

/// A restrained window: exact Ornstein–Uhlenbeck steps of x in the spring k (kT/L²) about
/// `centre` with diffusion coefficient d, x' = c + (x − c) e^{−kdh} + sqrt((1 − e^{−2kdh})/k) ξ
/// (Uhlenbeck & Ornstein, Phys. Rev. 36, 823 (1930)).
fn window(centre: f64, k: f64, d: f64, h: f64, n: usize, s: u64) -> Vec<f64> {
    let e = (-k * d * h).exp();
    let sd = ((1.0 - e * e) / k).sqrt();
    let mut rng = seed::stream(s, 0);
    let mut x = centre + rng.sample::<f64, _>(StandardNormal) / k.sqrt();
    (0..n)
        .map(|_| {
            x = centre + (x - centre) * e + sd * rng.sample::<f64, _>(StandardNormal);
            x
        })
        .collect()
}

/// "t,x,v" text with a header (or "t,x" without velocities).
fn write(path: &Path, h: f64, xs: &[f64], vs: Option<&[f64]>) {
    let mut s = String::from(if vs.is_some() { "t,x,v\n" } else { "t,x\n" });
    for (i, x) in xs.iter().enumerate() {
        match vs {
            Some(v) => s.push_str(&format!("{},{x},{}\n", (i + 1) as f64 * h, v[i])),
            None => s.push_str(&format!("{},{x}\n", (i + 1) as f64 * h)),
        }
    }
    std::fs::write(path, s).unwrap();
}

/// Free particle: m = 2, γ = 1, sampled every 0.02 (γΔt = 0.02) for T = 10⁴ (the Green–Kubo
/// window of about 10/γ then leaves a relative se near 5%).
const FREE: (f64, f64, f64, usize) = (2.0, 1.0, 0.02, 500_000);
/// Double well: E_b = 2 kT (ω₀² = 16), γ = 40 = 10 ω₀, so that the velocity relaxes long
/// before the well turns the particle (Green–Kubo is then only 5% high); BAOAB step
/// 0.0025 (γh = 0.1) sampled every 0.01, T = 2200 (about a dozen transitions each way at a
/// Kramers rate near 0.006).
const WELL: (f64, f64, f64, usize, usize) = (2.0, 40.0, 0.0025, 4, 220_000);
const WELL_CORES: &str = "--cores=-1.3:-0.7,0.7:1.3";
/// Weak friction in a deeper well: E_b = 3 kT (ω₀² = 24), γ = 2, BAOAB step 0.005 sampled every
/// 0.01 (γΔt = 0.02), T = 5000 (about a hundred transitions each way). Here ∫C/∫|C| ≈ 0.1 and
/// the Green–Kubo route gave γ ≈ 25 before the observed force entered the kernel inversion.
const WEAK: (f64, f64, f64, usize, usize) = (3.0, 2.0, 0.005, 2, 500_000);
/// Windows: D = 0.5, springs 4 and 9 kT/L², centres −1 and 0.5, sampled every 0.05 (τ = 1/(kD)
/// = 0.5 and 0.22) for 200 000 samples.
const WIN_D: f64 = 0.5;
const WIN_H: f64 = 0.05;

fn dir() -> &'static PathBuf {
    static D: OnceLock<PathBuf> = OnceLock::new();
    D.get_or_init(|| {
        let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("cli_observe_friction");
        std::fs::create_dir_all(&d).unwrap();
        let (m, g, h, n) = FREE;
        let (x, v) = free_particle(m, g, h, n, 91);
        write(&d.join("free.csv"), h, &x, Some(&v));
        let (eb, g, h, every, n) = WELL;
        let (x, v) = double_well(eb, g, h, every, n, 92);
        write(&d.join("well.csv"), h * every as f64, &x, Some(&v));
        let (eb, g, h, every, n) = WEAK;
        let (x, v) = double_well(eb, g, h, every, n, 95);
        write(&d.join("weak.csv"), h * every as f64, &x, Some(&v));
        let w1 = window(-1.0, 4.0, WIN_D, WIN_H, 200_000, 93);
        write(&d.join("win1.csv"), WIN_H, &w1, None);
        let w2 = window(0.5, 9.0, WIN_D, WIN_H, 200_000, 94);
        write(&d.join("win2.csv"), WIN_H, &w2, None);
        write(&d.join("short.csv"), WIN_H, &w1[..300], None);
        d
    })
}

fn path(name: &str) -> String {
    dir().join(name).display().to_string()
}

/// |value − truth| ≤ 4 se + bias, and se below `max_rel` of the truth (so that the check means
/// something).
fn near(what: &str, e: &Value, truth: f64, bias: f64, max_rel: f64) {
    let (v, se) = (e["value"].as_f64().unwrap(), e["se"].as_f64().unwrap());
    assert!(se > 0.0 && se < max_rel * truth, "{what}: se {se}");
    assert!(
        (v - truth).abs() <= 4.0 * se + bias,
        "{what}: {v} ± {se} vs {truth} (bias {bias})"
    );
    let ci = &e["ci95"];
    assert!(
        ci[0].as_f64().unwrap() < v && v < ci[1].as_f64().unwrap(),
        "{what}: {e}"
    );
}

/// The free particle's cores lie where it never goes: the kinetics are empty, the friction is
/// not.
const FAR_CORES: &str = "--cores=-1000:-900,900:1000";

// (a) Given velocities of a free Langevin particle (exact process, source above): γ by
// Green–Kubo/Einstein within 4 se of the generating γ (trapezoid bias (γΔt)²/12 = 1e-5, far below
// the se), the equipartition mass within 4 se of m, and no memory
// resolved.
#[test]
fn velocity_column_gives_the_friction() {
    let f = json(&[
        "observe",
        &path("free.csv"),
        "--velocity",
        "v",
        FAR_CORES,
        "--json",
    ]);
    let r = &f["friction"];
    assert_eq!(r["origin"], "given");
    assert_eq!(r["gamma_route"], "green_kubo");
    assert_eq!(r["mass_given"], false);
    let (m, g, _, _) = FREE;
    near("γ", &r["gamma"], g, 0.0, 0.1);
    near("m", &r["mass"], m, 0.0, 0.1);
    near("D", &r["diffusion"], 1.0 / (m * g), 0.0, 0.1);
    assert!(r["kernel"]["fit"].is_null());
    assert!(f["regime"].is_null());
}

// (a) The same positions through central differences: γ sits on the stated biased value
// γ f(2γΔt) (−1.3%; exact for this process, velocity.rs module doc) within 4 se; a given mass is
// used as given (and γ = kT/(m D) then carries no finite-difference bias: D is unbiased).
#[test]
fn central_differences_state_their_bias() {
    let (m, g, h, _) = FREE;
    let f = json(&[
        "observe",
        &path("free.csv"),
        "--friction",
        FAR_CORES,
        "--json",
    ]);
    let r = &f["friction"];
    assert_eq!(r["origin"], "central_difference");
    near("γ", &r["gamma"], g * fd_factor(g * h), 0.0, 0.1);
    let bias = r["fd_bias"].as_f64().unwrap();
    assert!((bias - (fd_factor(g * h) - 1.0)).abs() < 1e-3, "{bias}");
    let f = json(&[
        "observe",
        &path("free.csv"),
        "--friction",
        "--mass",
        "2",
        FAR_CORES,
        "--json",
    ]);
    let r = &f["friction"];
    assert_eq!(r["mass_given"], true);
    assert_eq!(r["mass"]["value"].as_f64(), Some(m));
    near("γ (given m)", &r["gamma"], g, 0.0, 0.1);
    let t = run(&["observe", &path("free.csv"), "--friction", FAR_CORES]);
    let text = String::from_utf8(t.stdout).unwrap();
    for want in [
        "friction from central-difference",
        "equipartition",
        "memoryless at this sampling",
        "f(2γΔt) − 1",
    ] {
        assert!(text.contains(want), "no {want:?} in {text}");
    }
}

// (a) A double well with velocities: the well's force takes φ ≈ 5% of the velocity correlation,
// so γ comes from the kernel with the observed mean force, within 4 se plus 2% of the generating
// γ (the memoryless γ of the spike is exact for BAOAB's e^{−γt}; the splitting error in the well,
// ω₀²h² = 0.01%, and the spline's bias of U′ are allowed 2%); the written scenario carries the observed mass
// and friction, `rate` reads it and names a regime, the same one observe reports (common
// practice, no source).
#[test]
fn written_scenario_carries_the_friction_and_rate_diagnoses_it() {
    let (prof, scen) = (path("well_profile.csv"), path("well.toml"));
    let f = json(&[
        "observe",
        &path("well.csv"),
        "--velocity",
        "3",
        WELL_CORES,
        "--profile",
        &prof,
        "--scenario-out",
        &scen,
        "--json",
    ]);
    let text = std::fs::read_to_string(&scen).unwrap();
    let t: toml::Table = text.parse().unwrap();
    let p = t["particle"].as_table().unwrap();
    let r = &f["friction"];
    let g = WELL.1;
    assert_eq!(r["gamma_route"], "kernel_area", "{r}");
    near("γ", &r["gamma"], g, 0.02 * g, 0.1);
    near("m", &r["mass"], 1.0, 0.0, 0.1);
    let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * b.abs();
    assert!(close(
        p["mass"].as_float().unwrap(),
        r["mass"]["value"].as_f64().unwrap()
    ));
    assert!(
        close(
            p["friction"].as_float().unwrap(),
            r["gamma"]["value"].as_f64().unwrap()
        ),
        "{text}"
    );
    assert!(!text.contains("fill in"), "{text}");
    let regime = f["regime"]["name"].as_str().expect("a regime").to_string();
    let rate = json(&["rate", &scen, "--json"]);
    assert_eq!(rate["regime"]["name"].as_str(), Some(regime.as_str()));
    // memory_time only with a resolved, well-determined kernel fit (main.rs ObservedParticle)
    match &r["kernel"]["fit"] {
        Value::Null => assert!(!p.contains_key("memory_time"), "{text}"),
        fit => {
            let tau = &fit["memory_time"];
            let ok = tau["se"].as_f64().unwrap() <= tau["value"].as_f64().unwrap() / 3.0;
            assert_eq!(p.contains_key("memory_time"), ok, "{text}");
        }
    }
}

// (a) Weak friction in a double well (the case that failed: Green–Kubo took it for a free
// particle): the kernel route with the observed mean force gives γ within 4 se plus 2% (BAOAB's O
// step makes the free VACF e^{−γt} exactly; the splitting error in the well, ω₀²h² = 0.06%, and
// the spline's bias of U′ are allowed 2%), reports Green–Kubo's γ beside it far above, and writes
// γ into the scenario.
#[test]
fn weak_friction_in_a_double_well_takes_the_kernel_route() {
    let (prof, scen) = (path("weak_profile.csv"), path("weak.toml"));
    let f = json(&[
        "observe",
        &path("weak.csv"),
        "--velocity",
        "v",
        "--profile",
        &prof,
        "--scenario-out",
        &scen,
        "--json",
    ]);
    let r = &f["friction"];
    let g = WEAK.1;
    assert_eq!(r["gamma_route"], "kernel_area", "{r}");
    assert_eq!(r["confined"], true);
    near("γ", &r["gamma"], g, 0.02 * g, 0.1);
    let gk = r["gamma_green_kubo"]["value"].as_f64().unwrap();
    assert!(gk > 2.0 * g, "Green–Kubo {gk}");
    let phi = r["force"]["share"]["value"].as_f64().unwrap();
    assert!(phi > 0.5, "φ {phi}");
    let text = std::fs::read_to_string(&scen).unwrap();
    let t: toml::Table = text.parse().unwrap();
    let written = t["particle"]["friction"]
        .as_float()
        .expect("friction written");
    assert!((written - r["gamma"]["value"].as_f64().unwrap()).abs() < 1e-12 * g);
    let table =
        String::from_utf8(run(&["observe", &path("weak.csv"), "--velocity", "v"]).stdout).unwrap();
    for want in ["force share φ", "γ, Green–Kubo", "not used"] {
        assert!(table.contains(want), "no {want:?} in {table}");
    }
}

// (a) With --diffusion the table's D(x) is kept and the friction is left out with a note (the
// scenario reader takes D(x) from the table); the scenario still loads.
#[test]
fn a_d_column_keeps_the_friction_out() {
    let (prof, scen) = (path("well_d_profile.csv"), path("well_d.toml"));
    let f = json(&[
        "observe",
        &path("well.csv"),
        "--velocity",
        "v",
        WELL_CORES,
        "--diffusion",
        "--profile",
        &prof,
        "--scenario-out",
        &scen,
        "--json",
    ]);
    let text = std::fs::read_to_string(&scen).unwrap();
    let t: toml::Table = text.parse().unwrap();
    let p = t["particle"].as_table().unwrap();
    assert!(
        p.contains_key("mass") && !p.contains_key("friction"),
        "{text}"
    );
    let notes = f["notes"].to_string();
    assert!(notes.contains("not written beside it"), "{notes}");
    assert!(f["regime"]["name"].is_string(), "{f}");
}

// (b) Restrained windows (exact OU, source above): D = var²/∫C (Woolf & Roux, J. Am. Chem. Soc.
// 116, 5916 (1994); Hummer, New J. Phys. 7, 34 (2005)) within 4 batch-means se of the generating
// D plus 0.5% (the trapezoid rule on an exponential sampled at Δt = τ/10 is high by
// (Δt/τ)²/12 < 0.1%; the truncation at 6 τ_int leaves e^{−6} ≈ 0.25% out). The means lie at the
// centres, and a spring given in kJ/mol/nm² is converted to kT/nm².
#[test]
fn windows_give_d_at_their_means() {
    let f = json(&[
        "observe",
        &path("win1.csv"),
        &path("win2.csv"),
        "--spring",
        "4,9",
        "--json",
    ]);
    let w = f["windows"].as_array().unwrap();
    assert_eq!(w.len(), 2);
    for (wi, centre, k) in [(&w[0], -1.0, 4.0), (&w[1], 0.5, 9.0)] {
        let (d, se) = (wi["d"].as_f64().unwrap(), wi["d_se"].as_f64().unwrap());
        assert!(se > 0.0 && se < 0.05 * WIN_D, "{wi}");
        assert!((d - WIN_D).abs() <= 4.0 * se + 0.005 * WIN_D, "{d} ± {se}");
        // the mean of 200 000 samples with τ_int ≈ 10 frames: se ≈ sqrt(2·10/(2e5 k)) ≤ 0.005
        assert!((wi["mean"].as_f64().unwrap() - centre).abs() < 0.02, "{wi}");
        assert_eq!(wi["spring_kT"].as_f64(), Some(k));
    }
    assert!(f.get("free_energy").is_none() && f.get("kinetics").is_none());
    let scen = dir().join("kj.toml");
    std::fs::write(
        &scen,
        "[units]\nenergy = \"kJ/mol\"\nlength = \"nm\"\ntime = \"ps\"\ntemperature = 300\n\n[particle]\ndiffusion = 1\n\n[potential]\nfamily = \"double-well\"\nbarrier = 5\nhalf_width = 1\n\n[states]\nstart = -1\n",
    )
    .unwrap();
    let f = json(&[
        "observe",
        &path("win1.csv"),
        "--spring",
        "10",
        "--scenario",
        scen.to_str().unwrap(),
        "--json",
    ]);
    let kt = f["kT"].as_f64().unwrap();
    let got = f["windows"][0]["spring_kT"].as_f64().unwrap();
    assert!((got - 10.0 / kt).abs() < 1e-12 * got, "{got}");
    let text =
        String::from_utf8(run(&["observe", &path("win1.csv"), "--spring", "4"]).stdout).unwrap();
    assert!(
        text.contains("restrained windows") && text.contains("95% interval"),
        "{text}"
    );
}

fn assert_one_line(args: &[&str], wants: &[&str]) {
    let out = run(args);
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
    assert!(out.stdout.is_empty(), "{args:?}");
    assert_eq!(err.trim_end().lines().count(), 1, "{args:?}: {err}");
    assert!(!err.contains("panicked"), "{err}");
    for w in wants {
        assert!(err.contains(w), "{args:?}: no {w:?} in {err}");
    }
}

// (c) Bad inputs: one line, exit 2, naming the option or the file (common practice, no source).
#[test]
fn bad_inputs_give_one_line() {
    let (w1, w2, free) = (path("win1.csv"), path("win2.csv"), path("free.csv"));
    let short = path("short.csv");
    assert_one_line(
        &["observe", &w1, "--spring", "0"],
        &["--spring", "positive"],
    );
    assert_one_line(
        &["observe", &w1, "--spring", "-2"],
        &["--spring", "positive"],
    );
    assert_one_line(
        &["observe", &w1, &w2, "--spring", "1,2,3"],
        &["--spring", "3 spring constants for 2"],
    );
    assert_one_line(
        &["observe", &short, "--spring", "4"],
        &["short.csv", "too short"],
    );
    assert_one_line(
        &["observe", &w1, "--spring", "4", "--profile", &path("x.csv")],
        &["--profile", "--spring"],
    );
    assert_one_line(
        &["observe", &free, "--velocity", "speed", FAR_CORES],
        &["free.csv", "line 1", "no column \"speed\""],
    );
    assert_one_line(
        &["observe", &free, "--velocity", "2", FAR_CORES],
        &["free.csv", "velocity column 2"],
    );
    assert_one_line(
        &["observe", &free, "--velocity", "0", FAR_CORES],
        &["--velocity 0"],
    );
    assert_one_line(
        &["observe", &free, "--friction", "--mass", "-1", FAR_CORES],
        &["--mass", "positive"],
    );
    assert_one_line(
        &["observe", &free, "--mass", "1", FAR_CORES],
        &["--mass", "--velocity or --friction"],
    );
    assert_one_line(
        &["observe", &free, "--friction", "--velocity", "v"],
        &["--friction"],
    );
}
