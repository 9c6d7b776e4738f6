//! `escapade observe` through the binary, on trajectories written here: an overdamped particle in
//! the double well U = E_b((x/a)² − 1)², E_b = 3.5 kT, a = 1 nm, D = 1 nm²/ps, integrated by
//! Euler–Maruyama from fixed-seed streams (`escapade::seed::stream`), one trajectory as "t,x" text
//! and one as a NumPy .npy file. Fixed seeds; tolerances of about 4 standard errors plus the
//! stated biases.

mod common;
use common::{json, run};

use escapade::seed;
use rand::RngExt;
use rand_distr::StandardNormal;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

const EB: f64 = 3.5;
/// Integrator step (ps): the Euler–Maruyama density is off by O(D dt U'') ≈ 0.6% in the wells
/// (U'' = 8 E_b = 28 kT/nm²), far below the statistical errors below.
const DT: f64 = 2e-4;
/// Steps between samples: a sampling interval of 0.01 ps.
const EVERY: u64 = 50;
/// 1000 ps per trajectory: about 80 transitions each way at 1/MFPT ≈ 0.08 /ps.
const STEPS: u64 = 5_000_000;

/// The model the trajectories come from, in physical units (kT = 2.494 kJ/mol at 300 K).
const MODEL: &str = r#"
[units]
energy = "kJ/mol"
length = "nm"
time = "ps"
temperature = 300

[particle]
diffusion = 1.0

[potential]
family = "double-well"
barrier = "3.5 kT"
half_width = 1.0

[states]
start = -1.0
"#;

/// One trajectory, x += −U'(x) D dt + sqrt(2 D dt) ξ, sampled every EVERY steps; starts in a
/// well and ends after `steps` steps.
fn trajectory(index: u64, eb: f64, steps: u64) -> Vec<f64> {
    let mut rng = seed::stream(77, index);
    let s = (2.0 * DT).sqrt();
    let mut x = -1.0;
    let mut out = Vec::with_capacity((steps / EVERY) as usize);
    for k in 1..=steps {
        let f = -4.0 * eb * x * (x * x - 1.0);
        x += f * DT + s * rng.sample::<f64, _>(StandardNormal);
        if k.is_multiple_of(EVERY) {
            out.push(x);
        }
    }
    out
}

/// "t,x" text with a header.
fn write_text(path: &Path, xs: &[f64]) {
    let mut s = String::from("# invented test trajectory\nt,x\n");
    for (i, x) in xs.iter().enumerate() {
        s.push_str(&format!("{},{x}\n", (i + 1) as f64 * DT * EVERY as f64));
    }
    std::fs::write(path, s).unwrap();
}

/// A little-endian float64 .npy file of rows (t, x) (format version 1.0: magic, header length, a
/// padded dict literal ending in a newline so that the data start at a multiple of 64 bytes).
fn write_npy(path: &Path, xs: &[f64]) {
    let dict = format!(
        "{{'descr': '<f8', 'fortran_order': False, 'shape': ({}, 2), }}",
        xs.len()
    );
    let pad = (64 - (10 + dict.len() + 1) % 64) % 64;
    let header = format!("{dict}{}\n", " ".repeat(pad));
    let mut b = b"\x93NUMPY\x01\x00".to_vec();
    b.extend_from_slice(&(header.len() as u16).to_le_bytes());
    b.extend_from_slice(header.as_bytes());
    for (i, x) in xs.iter().enumerate() {
        let t = (i + 1) as f64 * DT * EVERY as f64;
        b.extend_from_slice(&t.to_le_bytes());
        b.extend_from_slice(&x.to_le_bytes());
    }
    std::fs::write(path, b).unwrap();
}

fn dir() -> &'static PathBuf {
    static D: OnceLock<PathBuf> = OnceLock::new();
    D.get_or_init(|| {
        let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("cli_observe");
        std::fs::create_dir_all(&d).unwrap();
        write_text(&d.join("run0.csv"), &trajectory(0, EB, STEPS));
        write_npy(&d.join("run1.npy"), &trajectory(1, EB, STEPS));
        std::fs::write(d.join("model.toml"), MODEL).unwrap();
        d
    })
}

fn path(name: &str) -> String {
    dir().join(name).display().to_string()
}

/// `observe` of both trajectories in the model's units, with `extra` arguments.
fn observe_both(extra: &[&str]) -> std::process::Output {
    let (a, b, m) = (path("run0.csv"), path("run1.npy"), path("model.toml"));
    run(&[
        &["observe", a.as_str(), b.as_str(), "--scenario", m.as_str()][..],
        extra,
    ]
    .concat())
}

/// The observed run of both trajectories in the model's units (its picture: observed.svg).
fn observed() -> &'static Value {
    static R: OnceLock<Value> = OnceLock::new();
    R.get_or_init(|| {
        let svg = path("observed.svg");
        let out = observe_both(&["--json", "--plot", &svg]);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice(&out.stdout).unwrap()
    })
}

// The table names both rates with their intervals and the units of the scenario (common
// practice, no source).
#[test]
fn table_shows_both_rates_in_the_scenario_units() {
    let out = observe_both(&[]);
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    for want in [
        "A → B",
        "B → A",
        "rate (1/ps)",
        "95% interval",
        "τ_int",
        "kJ/mol",
        "KS p-value",
    ] {
        assert!(text.contains(want), "no \"{want}\" in\n{text}");
    }
    // without a scenario the output says that it is in reduced units
    let out = run(&["observe", &path("run0.csv"), "-q"]);
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("reduced units") && text.contains("rate (1/τ)"));
}

// The JSON has the documented keys (README, "Observed trajectories"), and its rate is the exact
// one. Reference: with transition-based counting 1/k_AB is the mean first-passage time between
// the cores (Hummer, J. Chem. Phys. 120, 516 (2004)); the exact overdamped 1/MFPT from minimum
// to minimum comes from `escapade rate` on the generating model (Szabo, Schulten & Schulten,
// J. Chem. Phys. 72, 4350 (1980)). Tolerance: 4 standard errors k/sqrt(n) plus 5% for the
// difference between core edges and minima (the well relaxation time 1/(D U'') ≈ 0.04 ps
// against an MFPT of 12 ps), core entries noticed at the next sample (0.01 ps) and the
// integrator's O(dt) bias.
#[test]
fn json_has_the_documented_keys_and_the_exact_rate() {
    let r = observed();
    for key in [
        "units",
        "kT",
        "trajectories",
        "samples",
        "total_time",
        "position",
        "correlation",
        "free_energy",
        "kinetics",
        "profile",
        "written",
        "notes",
        "warnings",
    ] {
        assert!(r.get(key).is_some(), "no key {key}");
    }
    assert_eq!(r["units"]["time"], "ps");
    assert_eq!(r["trajectories"].as_array().unwrap().len(), 2);
    assert_eq!(r["samples"], 2 * STEPS / EVERY);
    for key in ["tau_int", "window", "converged"] {
        assert!(r["correlation"].get(key).is_some(), "correlation.{key}");
    }
    for key in ["x", "count", "u", "sigma_u"] {
        assert!(r["free_energy"]["bins"][0].get(key).is_some(), "bins.{key}");
    }
    let k = &r["kinetics"];
    for key in [
        "core_a",
        "core_b",
        "core_rule",
        "forward",
        "backward",
        "dwell_a",
        "dwell_b",
        "boundary",
    ] {
        assert!(k.get(key).is_some(), "kinetics.{key}");
    }
    for key in ["transitions", "exposure", "rate", "ci95", "upper95"] {
        assert!(k["forward"].get(key).is_some(), "forward.{key}");
    }
    for key in ["count", "mean", "cv", "ks_distance", "ks_p_value"] {
        assert!(k["dwell_a"].get(key).is_some(), "dwell_a.{key}");
    }
    let b = &r["profile"]["barrier"];
    for key in ["height", "height_kT", "sigma_kT", "minimum"] {
        assert!(
            b["from_a"].get(key).is_some(),
            "profile.barrier.from_a.{key}"
        );
    }
    // kT at 300 K is R·300 K = 2.494339 kJ/mol (CODATA 2018)
    assert!((r["kT"].as_f64().unwrap() - 2.494_339).abs() < 1e-6);
    let exact = json(&["rate", &path("model.toml"), "--json"])["rates"]["mfpt"]
        .as_f64()
        .unwrap();
    for dir in ["forward", "backward"] {
        let n = k[dir]["transitions"].as_f64().unwrap();
        let rate = k[dir]["rate"].as_f64().unwrap();
        assert!(n >= 50.0, "{dir}: only {n} transitions");
        let tol = 4.0 / n.sqrt() + 0.05;
        assert!(
            (rate / exact - 1.0).abs() < tol,
            "{dir}: observed {rate} /ps against exact {exact} (n = {n}, tolerance {tol})"
        );
    }
}

/// The rows (x, U, sigma_U) of a written profile.
fn profile_rows(file: &str) -> Vec<[f64; 3]> {
    std::fs::read_to_string(file)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with('x'))
        .map(|l| {
            let v: Vec<f64> = l.split(',').map(|f| f.parse().unwrap()).collect();
            [v[0], v[1], v[2]]
        })
        .collect()
}

// The loop closed: the written profile (in kJ/mol) read by `rate` through the written scenario
// gives back the generating barrier in kT. Reference: E_b = 3.5 kT of the generating model.
// Tolerance: 4 σ of a difference of two histogram bins, σ = hypot(σ_U at the top, σ_U at the
// reactant minimum) from the profile's own bootstrap column, plus 0.05 kT for the bins' averaging
// (U''h²/24 ≈ 0.01 kT in the wells) and the smoothing spline's rounding of the top.
#[test]
fn written_profile_gives_the_barrier_back_through_rate() {
    let (csv, toml) = (path("profile.csv"), path("fitted.toml"));
    let out = observe_both(&["--profile", &csv, "--scenario-out", &toml, "-q"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let rows = profile_rows(&csv);
    // U is written in kJ/mol: its range is several kT of 2.494 kJ/mol
    let top = rows.iter().map(|r| r[1]).fold(0.0, f64::max);
    assert!(top > 3.0 * 2.494, "U column not in kJ/mol: top {top}");
    let rate = json(&["rate", &toml, "--json"]);
    let l = &rate["landscape"];
    let eb = l["barrier_height_kT"].as_f64().unwrap();
    let near = |x: f64| {
        rows.iter()
            .min_by(|a, b| (a[0] - x).abs().total_cmp(&(b[0] - x).abs()))
            .unwrap()[2]
            / 2.494_339
    };
    let sigma = near(l["barrier"].as_f64().unwrap()).hypot(near(l["reactant"].as_f64().unwrap()));
    let tol = 4.0 * sigma + 0.05;
    assert!(
        (eb - EB).abs() < tol,
        "barrier {eb} kT from the written profile, generated {EB} (tolerance {tol})"
    );
    assert_eq!(rate["units"]["energy"], "kJ/mol");
}

// Columns are numbered from 1 on the command line: a three-column file (step, t, x) read with
// --time 2 --position 3 gives the same analysis as the two-column file (common practice, no
// source).
#[test]
fn columns_are_numbered_from_one() {
    let xs = trajectory(0, EB, STEPS / 10);
    write_text(&dir().join("short.csv"), &xs);
    let mut s = String::new();
    for (i, x) in xs.iter().enumerate() {
        s.push_str(&format!("{i} {} {x}\n", (i + 1) as f64 * DT * EVERY as f64));
    }
    std::fs::write(dir().join("three.txt"), s).unwrap();
    let a = json(&["observe", &path("short.csv"), "--json"]);
    let b = json(&[
        "observe",
        &path("three.txt"),
        "--time",
        "2",
        "--position",
        "3",
        "--json",
    ]);
    assert_eq!(a["kinetics"]["forward"], b["kinetics"]["forward"]);
    assert_eq!(a["samples"], b["samples"]);
}

// A trajectory that never leaves core A: a warning and no rate, only an upper bound (common
// practice, no source: never a rate without a transition behind it).
#[test]
fn no_transition_gives_a_warning_and_no_rate() {
    // 12 kT: escape takes ~1e4 ps, the trajectory 20 ps
    let xs = trajectory(5, 12.0, 100_000);
    write_text(&dir().join("stuck.csv"), &xs);
    let args = ["observe", &path("stuck.csv"), "--cores=-1.3:-0.7,0.7:1.3"];
    let r = json(&[&args[..], &["--json"]].concat());
    let f = &r["kinetics"]["forward"];
    assert_eq!(f["transitions"], 0);
    assert!(f["rate"].is_null() && f["ci95"].is_null());
    assert!(f["upper95"].as_f64().unwrap() > 0.0);
    let w: Vec<&str> = r["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    assert!(w.iter().any(|s| s.contains("no A → B transition")), "{w:?}");
    let text = String::from_utf8(run(&args).stdout).unwrap();
    assert!(text.contains("warning: no A → B transition") && text.contains("below"));
}

/// Runs `observe` on a file with `content` and returns (exit code, stderr).
fn bad(name: &str, content: &str, extra: &[&str]) -> (Option<i32>, String) {
    let p = dir().join(name);
    std::fs::write(&p, content).unwrap();
    let p = p.display().to_string();
    let out = run(&[&["observe", p.as_str()][..], extra].concat());
    assert!(out.stdout.is_empty(), "{name}: stdout not empty");
    (out.status.code(), String::from_utf8(out.stderr).unwrap())
}

fn assert_one_line(name: &str, code: Option<i32>, err: &str, wants: &[&str]) {
    assert_eq!(code, Some(2), "{name}: {err}");
    assert_eq!(err.trim_end().lines().count(), 1, "{name}: {err}");
    assert!(!err.contains("panicked"), "{name}: {err}");
    for w in wants {
        assert!(err.contains(w), "{name}: no \"{w}\" in {err}");
    }
}

// Bad files: one line on stderr, exit 2, naming the file and the line (common practice, no
// source).
#[test]
fn bad_files_name_the_file_and_the_line() {
    let good: String = (1..=200)
        .map(|i| format!("{},{}\n", i as f64 * 0.01, (i as f64).sin()))
        .collect();
    let at = |line: usize, text: &str| {
        let mut l: Vec<String> = good.lines().map(String::from).collect();
        l[line - 1] = text.to_string();
        l.join("\n")
    };
    for (name, content, line, what) in [
        (
            "nan.csv",
            at(5, "0.05,nan"),
            "line 5",
            "not a finite number",
        ),
        ("word.csv", at(7, "0.07,abc"), "line 7", "not a number"),
        (
            "backwards.csv",
            at(9, "0.01,0.5"),
            "line 9",
            "does not increase",
        ),
    ] {
        let (code, err) = bad(name, &content, &[]);
        assert_one_line(name, code, &err, &[name, line, what]);
    }
    let missing = path("no_such_file.csv");
    let out = run(&["observe", &missing]);
    let err = String::from_utf8(out.stderr).unwrap();
    assert_one_line(
        "missing",
        out.status.code(),
        &err,
        &[&missing, "cannot read"],
    );
    // and the options of the command line
    for (args, want) in [
        (&["--cores", "1:2"][..], "--cores 1:2"),
        (&["--position", "0"][..], "--position 0"),
        (&["--cores=1:2,0:3"][..], "--cores"),
        (&["--bin-width=-1"][..], "--bin-width"),
    ] {
        let (code, err) = bad("ok.csv", &good, args);
        assert_one_line(&format!("{args:?}"), code, &err, &[want]);
    }
}

/// Files of the run with `--diffusion`: its JSON, the profile and the scenario it wrote (and its
/// picture: observed_d.svg).
fn with_diffusion() -> &'static (Value, String, String) {
    static R: OnceLock<(Value, String, String)> = OnceLock::new();
    R.get_or_init(|| {
        let (csv, toml) = (path("profile_d.csv"), path("fitted_d.toml"));
        let svg = path("observed_d.svg");
        let out = observe_both(&[
            "--plot",
            &svg,
            "--diffusion",
            "--json",
            "--profile",
            &csv,
            "--scenario-out",
            &toml,
        ]);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        (serde_json::from_slice(&out.stdout).unwrap(), csv, toml)
    })
}

/// The interface nearest x.
fn interface_near(d: &Value, x: f64) -> &Value {
    d["interfaces"]
        .as_array()
        .unwrap()
        .iter()
        .min_by(|a, b| {
            let dist = |v: &Value| (v["x"].as_f64().unwrap() - x).abs();
            dist(a).total_cmp(&dist(b))
        })
        .unwrap()
}

// D(x) of the constant-D double well at the wells (x = ±1 nm) and the barrier (x = 0). Truth:
// D = 1 nm²/ps of the generator, raised by the biases the propagator module states: the spread
// of positions inside the bins, Δx²/(12DΔt), and the lattice's F''Δx²/4 (U'' = 4E_b(3x² − 1):
// +28 kT/nm² in the wells, −14 at the top, where the sign is carried over from the wells' form).
// Tolerance: 4 σ_D with σ_D = the reported 95% interval's half width / 1.96, so the check is that
// the truth lies within the reported interval widened from 2 to 4 σ. Beside it the
// conditional-moment D in the wells, biased low by the finite lag (for an Ornstein–Uhlenbeck well
// of curvature k: D(1 − e^{−2kDΔt})/(2kDΔt) = 0.60 D at Δt = 0.02 ps; see
// tests/observe_diffusion.rs), lies more than 4 se below 1.
#[test]
fn diffusion_covers_the_generating_d_at_the_wells_and_the_barrier() {
    let d = &with_diffusion().0["diffusion"];
    let dx = d["bins"]["hi"].as_f64().unwrap() - d["bins"]["lo"].as_f64().unwrap();
    let dx = dx / d["bins"]["count"].as_f64().unwrap();
    let lag = d["lag_time"].as_f64().unwrap();
    for x in [-1.0, 0.0, 1.0] {
        let i = interface_near(d, x);
        let at = i["x"].as_f64().unwrap();
        let curvature = 4.0 * EB * (3.0 * at * at - 1.0);
        let expected = 1.0 + dx * dx / (12.0 * lag) + curvature * dx * dx / 4.0;
        let (median, sigma) = (i["d"].as_f64().unwrap(), i["sigma_d"].as_f64().unwrap());
        let ci = [
            i["ci95"][0].as_f64().unwrap(),
            i["ci95"][1].as_f64().unwrap(),
        ];
        assert!((sigma - (ci[1] - ci[0]) / 3.92).abs() < 1e-12 * sigma);
        // a real error bar: between 1% and 20% of D for ~10^5 transitions per lag
        assert!(sigma > 0.01 && sigma < 0.2, "x {at}: σ_D {sigma}");
        assert!(
            (median - expected).abs() < 4.0 * sigma,
            "x {at}: D {median} ± {sigma} {ci:?}, expected {expected}"
        );
        if x != 0.0 {
            let (m, se) = (
                i["moments_d"].as_f64().unwrap(),
                i["moments_se"].as_f64().unwrap(),
            );
            assert!(
                m < 1.0 - 4.0 * se && m < ci[0],
                "x {at}: moments {m} ± {se}"
            );
        }
    }
}

// The JSON of --diffusion has the documented keys (README, "Your own trajectories"), and
// "diffusion" is null without it (common practice, no source).
#[test]
fn diffusion_json_has_the_documented_keys() {
    assert!(observed()["diffusion"].is_null());
    let d = &with_diffusion().0["diffusion"];
    for key in [
        "bins",
        "range_rule",
        "interval",
        "pairs",
        "lag_frames",
        "lag_time",
        "lag_rule",
        "interfaces",
        "scan",
        "moments",
        "notes",
        "warnings",
    ] {
        assert!(d.get(key).is_some(), "diffusion.{key}");
    }
    for key in ["lo", "hi", "count"] {
        assert!(d["bins"].get(key).is_some(), "bins.{key}");
    }
    assert_eq!(d["bins"]["count"], 30);
    assert_eq!(d["interfaces"].as_array().unwrap().len(), 29);
    for key in ["x", "d", "ci95", "sigma_d", "moments_d", "moments_se"] {
        assert!(d["interfaces"][0].get(key).is_some(), "interfaces.{key}");
    }
    for key in ["lag_frames", "pairs", "counted", "dropped_fraction"] {
        assert!(d["pairs"][0].get(key).is_some(), "pairs.{key}");
    }
    for key in ["fits", "max_relative_spread", "inconsistent", "warning"] {
        assert!(d["scan"].get(key).is_some(), "scan.{key}");
    }
    let lags: Vec<u64> = d["scan"]["fits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["lag_frames"].as_u64().unwrap())
        .collect();
    assert_eq!(lags, [1, 2, 5, 10]);
    for key in ["diffusion", "bin_bias", "acceptance", "free_energy"] {
        assert!(d["scan"]["fits"][0].get(key).is_some(), "fits.{key}");
    }
    for key in ["lag_frames", "lag_time", "bins", "note"] {
        assert!(d["moments"][0].get(key).is_some(), "moments.{key}");
    }
    for key in ["x", "samples", "drift", "d_raw", "d", "d_se"] {
        assert!(
            d["moments"][0]["bins"][0].get(key).is_some(),
            "moments.bins.{key}"
        );
    }
    // 0.5% is left out at each end of the range: about 1% of the pairs are dropped
    let f = d["pairs"][0]["dropped_fraction"].as_f64().unwrap();
    assert!(f > 0.002 && f < 0.05, "dropped {f}");
    assert!((d["interval"].as_f64().unwrap() - 0.01).abs() < 1e-9);
}

// The written profile carries D and sigma_D (read here as CSV text): D at each row interpolated in ln D between the interfaces, sigma_D = the
// 95% half width / 1.96 interpolated linearly, the ends' values beyond them (the rules the
// README states; exact up to rounding). `rate` reads the written scenario as it is, which has no
// [particle]: the table's D gives the dynamics, and its sigma_D enters the rate intervals beside
// sigma_U (uncertainty.diffusion_noise says which dominates). Reference: the generating model's
// exact 1/MFPT from `rate` (Szabo, Schulten & Schulten 1980). Tolerance: 4 σ of ln k from the
// barrier's σ_U (hypot of the top and the minimum) and σ_D/D at the top, plus 0.15 for the
// lattice biases of D (≈ 6% in the wells, 3% from the bins' spread) and the histogram's bins.
#[test]
fn profile_has_d_columns_and_rate_reads_them() {
    let (r, csv, toml) = with_diffusion();
    let d = &r["diffusion"];
    let text = std::fs::read_to_string(csv).unwrap();
    let header = text.lines().find(|l| !l.starts_with('#')).unwrap();
    assert_eq!(header, "x,U,sigma_U,D,sigma_D");
    let rows: Vec<Vec<f64>> = text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with('x'))
        .map(|l| l.split(',').map(|f| f.parse().unwrap()).collect())
        .collect();
    let iface: Vec<[f64; 3]> = d["interfaces"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| {
            [
                i["x"].as_f64().unwrap(),
                i["d"].as_f64().unwrap(),
                i["sigma_d"].as_f64().unwrap(),
            ]
        })
        .collect();
    let expect = |x: f64| -> (f64, f64) {
        let (first, last) = (iface[0], iface[iface.len() - 1]);
        if x <= first[0] {
            return (first[1], first[2]);
        }
        if x >= last[0] {
            return (last[1], last[2]);
        }
        let k = iface.iter().rposition(|i| i[0] <= x).unwrap();
        let (a, b) = (iface[k], iface[k + 1]);
        let w = (x - a[0]) / (b[0] - a[0]);
        (
            ((1.0 - w) * a[1].ln() + w * b[1].ln()).exp(),
            (1.0 - w) * a[2] + w * b[2],
        )
    };
    assert!(rows.len() > 20);
    for row in &rows {
        assert_eq!(row.len(), 5);
        let (dd, sd) = expect(row[0]);
        assert!(
            (row[3] - dd).abs() < 1e-12 * dd,
            "x {}: D {} vs {dd}",
            row[0],
            row[3]
        );
        assert!(
            (row[4] - sd).abs() < 1e-12 * sd,
            "x {}: σ_D {} vs {sd}",
            row[0],
            row[4]
        );
    }
    let scenario = std::fs::read_to_string(toml).unwrap();
    assert!(!scenario.contains("[particle]"), "{scenario}");
    let rate = json(&["rate", toml, "--json"]);
    let exact = json(&["rate", &path("model.toml"), "--json"])["rates"]["mfpt"]
        .as_f64()
        .unwrap();
    let k = rate["rates"]["mfpt"].as_f64().unwrap();
    let sources = &rate["uncertainty"]["diffusion_noise"]["rates"];
    let mfpt = sources
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["key"] == "mfpt")
        .unwrap();
    assert!(mfpt["var_ln_k_diffusion"].as_f64().unwrap() > 0.0, "{mfpt}");
    assert!(["profile", "diffusion"].contains(&mfpt["dominant"].as_str().unwrap()));
    let l = &rate["landscape"];
    let near = |x: f64| {
        rows.iter()
            .min_by(|a, b| (a[0] - x).abs().total_cmp(&(b[0] - x).abs()))
            .unwrap()
    };
    let (top, bottom) = (
        near(l["barrier"].as_f64().unwrap()),
        near(l["reactant"].as_f64().unwrap()),
    );
    let sigma = (top[2].hypot(bottom[2]) / 2.494_339).hypot(top[4] / top[3]);
    let tol = 4.0 * sigma + 0.15;
    assert!(
        (k / exact).ln().abs() < tol,
        "rate {k} from the written profile with D, exact {exact} (tolerance {tol} in ln k)"
    );
}

// The table shows a compact D(x): the wells and the barrier marked, about a third of the
// interfaces, the lag scan and the note on dropped pairs (common practice, no source).
#[test]
fn table_shows_a_compact_diffusion_profile() {
    let out = observe_both(&["--diffusion", "--lags", "2,5", "--d-bins", "24"]);
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    for want in [
        "D(x) by the Bayesian propagator",
        "D (nm²/ps)",
        "95% interval",
        "conditional moments D",
        "well A",
        "barrier",
        "well B",
        "lag scan over 2, 5 frames",
        "are dropped",
        "24 bins",
    ] {
        assert!(text.contains(want), "no \"{want}\" in\n{text}");
    }
    let part = &text[text.find("D(x) by the Bayesian").unwrap()..];
    let rows = part
        .lines()
        .take_while(|l| !l.starts_with("lag scan"))
        .filter(|l| l.starts_with('│'))
        .count();
    // a header and at most every third of 23 interfaces plus three marked ones
    assert!((6..=12).contains(&rows), "{rows} rows in\n{part}");
}

// Options of --diffusion: one line, exit 2, naming the option (common practice, no source).
#[test]
fn diffusion_options_are_checked() {
    const CORES: &str = "--cores=-1:-0.5,0.5:1";
    let good: String = (1..=400)
        .map(|i| format!("{},{}\n", i as f64 * 0.01, (i as f64 * 0.3).sin()))
        .collect();
    for (args, want) in [
        (&["--lags", "1,2"][..], "--diffusion"),
        (&["--diffusion", "--d-bins", "2", CORES][..], "--d-bins"),
        (&["--diffusion", "--lags", "0,2", CORES][..], "--lags"),
        (&["--diffusion", "--lags", "x"][..], "--lags"),
    ] {
        let (code, err) = bad("d_ok.csv", &good, args);
        assert_one_line(&format!("{args:?}"), code, &err, &[want]);
    }
}

// With --diffusion the written scenario's [particle] keeps only the mass: the table's D replaces
// the friction, and a memory time (which needs a friction) is left out with a note (common
// practice, no source: the scenario reader refuses a second D beside a table's).
#[test]
fn written_scenario_keeps_only_the_mass_beside_a_d_column() {
    let model = MODEL
        .replace(
            "[particle]\ndiffusion = 1.0",
            "[particle]\nmass = 20\nfriction = 50\nmemory_time = 0.05",
        )
        .replace("temperature = 300", "temperature = 300\nmass = \"amu\"");
    std::fs::write(dir().join("inertial.toml"), model).unwrap();
    let (csv, toml) = (path("profile_m.csv"), path("fitted_m.toml"));
    let r = json(&[
        "observe",
        &path("run0.csv"),
        "--scenario",
        &path("inertial.toml"),
        "--diffusion",
        "--lags",
        "5",
        "--d-bins",
        "12",
        "--profile",
        &csv,
        "--scenario-out",
        &toml,
        "--json",
    ]);
    let text = std::fs::read_to_string(&toml).unwrap();
    let doc: toml::Table = text.parse().unwrap();
    let particle = doc["particle"].as_table().unwrap();
    assert_eq!(particle.keys().collect::<Vec<_>>(), ["mass"], "{text}");
    let notes = r["notes"].as_array().unwrap();
    assert!(
        notes
            .iter()
            .any(|n| n.as_str().unwrap().contains("memory_time left out")),
        "{notes:?}"
    );
}

// ---------------------------------------------------------------------------------------------
// the picture (`--plot`), read through its markup (src/report/svg.rs module doc); what a reader
// needs to see is common practice, no source

fn has_class(n: &roxmltree::Node, c: &str) -> bool {
    n.attribute("class")
        .is_some_and(|a| a.split_whitespace().any(|w| w == c))
}

/// Data elements (outside the legend) with class `c` and, when given, data-series `series`.
fn elements<'a>(
    doc: &'a roxmltree::Document,
    c: &str,
    series: Option<&str>,
) -> Vec<roxmltree::Node<'a, 'a>> {
    doc.descendants()
        .filter(|n| has_class(n, c))
        .filter(|n| series.is_none_or(|s| n.attribute("data-series") == Some(s)))
        .filter(|n| !n.ancestors().any(|a| has_class(&a, "legend")))
        .collect()
}

/// The (x, y) of a `translate(x,y)` marker.
fn centre(n: &roxmltree::Node) -> (f64, f64) {
    let t = n.attribute("transform").unwrap();
    let (x, y) = t
        .trim_start_matches("translate(")
        .trim_end_matches(')')
        .split_once(',')
        .unwrap();
    (x.parse().unwrap(), y.parse().unwrap())
}

fn attr(n: &roxmltree::Node, k: &str) -> f64 {
    n.attribute(k).unwrap().parse().unwrap()
}

fn svg_texts(doc: &roxmltree::Document) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| n.text().unwrap_or_default().trim().to_string())
        .collect()
}

// One U point per bin with a ±σ_U bar wherever the bin has a σ_U, the highest U drawn highest
// and the lowest lowest; both cores shaded in x order; axis labels in the scenario's units; no D
// panel without --diffusion. Without a scenario the labels read reduced units.
#[test]
fn plot_shows_u_with_its_error_bars_and_the_cores() {
    let r = observed();
    let text = std::fs::read_to_string(path("observed.svg")).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("well-formed XML");
    let bins = r["free_energy"]["bins"].as_array().unwrap();
    let u = elements(&doc, "marker", Some("U"));
    assert_eq!(u.len(), bins.len());
    let with_sigma = bins.iter().filter(|b| b["sigma_u"].is_f64()).count();
    assert!(with_sigma > bins.len() / 2);
    assert_eq!(elements(&doc, "sigma-u", None).len(), with_sigma);
    let at = |i: usize| centre(&u[i]).1;
    let by_u = |a: &&Value, b: &&Value| {
        a["u"]
            .as_f64()
            .unwrap()
            .total_cmp(&b["u"].as_f64().unwrap())
    };
    let top = bins
        .iter()
        .position(|b| b == bins.iter().max_by(by_u).unwrap())
        .unwrap();
    let bottom = bins
        .iter()
        .position(|b| b == bins.iter().min_by(by_u).unwrap())
        .unwrap();
    let ys: Vec<f64> = (0..u.len()).map(at).collect();
    assert_eq!(at(top), ys.iter().copied().fold(f64::INFINITY, f64::min));
    assert_eq!(
        at(bottom),
        ys.iter().copied().fold(f64::NEG_INFINITY, f64::max)
    );
    let cores = elements(&doc, "core", None);
    let names: Vec<&str> = cores
        .iter()
        .map(|c| c.attribute("data-name").unwrap())
        .collect();
    assert_eq!(names, ["A", "B"]);
    // core A (around x = −1) left of core B (around x = +1)
    assert!(attr(&cores[0], "x") + attr(&cores[0], "width") < attr(&cores[1], "x"));
    let t = svg_texts(&doc);
    for want in ["x (nm)", "U − U(lowest bin) (kJ/mol)"] {
        assert!(t.iter().any(|s| s == want), "no label {want:?} in {t:?}");
    }
    assert!(elements(&doc, "marker", Some("D")).is_empty());
    assert!(!t.iter().any(|s| s.starts_with("D (")));
    // reduced units
    let svg = path("observed_reduced.svg");
    let out = run(&["observe", &path("run0.csv"), "--plot", &svg]);
    assert!(out.status.success());
    let text = std::fs::read_to_string(&svg).unwrap();
    let doc = roxmltree::Document::parse(&text).unwrap();
    let t = svg_texts(&doc);
    for want in ["x (L)", "U − U(lowest bin) (kT)"] {
        assert!(t.iter().any(|s| s == want), "no label {want:?} in {t:?}");
    }
}

// With --diffusion: one D point per interface inside its 95% interval bar, one lighter
// conditional-moment point per interface that has one, and the D axis labelled with its units.
#[test]
fn plot_with_diffusion_adds_the_d_panel() {
    let d = &with_diffusion().0["diffusion"];
    let text = std::fs::read_to_string(path("observed_d.svg")).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("well-formed XML");
    let interfaces = d["interfaces"].as_array().unwrap();
    let points = elements(&doc, "marker", Some("D"));
    assert_eq!(points.len(), interfaces.len());
    // a bar and its two caps per interface
    let bars = elements(&doc, "d-ci95", None);
    assert_eq!(bars.len(), 3 * interfaces.len());
    for (p, bar) in points.iter().zip(bars.chunks(3)) {
        let (x, y) = centre(p);
        let b = &bar[0];
        assert!((attr(b, "x1") - x).abs() < 0.11, "bar not at its point");
        let (y1, y2) = (attr(b, "y1"), attr(b, "y2"));
        assert!(
            y1.min(y2) - 0.11 <= y && y <= y1.max(y2) + 0.11,
            "point outside its bar"
        );
    }
    let moments = interfaces
        .iter()
        .filter(|i| i["moments_d"].is_f64())
        .count();
    assert!(moments > 0);
    assert_eq!(elements(&doc, "marker", Some("D-moments")).len(), moments);
    assert_eq!(elements(&doc, "d-moments", None).len(), 3 * moments);
    // the U panel is still there
    let bins = with_diffusion().0["free_energy"]["bins"]
        .as_array()
        .unwrap()
        .len();
    assert_eq!(elements(&doc, "marker", Some("U")).len(), bins);
    let t = svg_texts(&doc);
    assert!(t.iter().any(|s| s == "D (nm²/ps)"), "no D label in {t:?}");
}
