//! Scans: CSV values equal what `rate` prints, SVG pictures are well-formed XML with their labels
//! and markers, the Arrhenius fit recovers an exactly Arrhenius rate, and a friction scan's
//! turnover maximum sits where the Mel'nikov–Meshkov rate has it.

use assert_cmd::Command;
use escapade::scan::{self, Spec};
use escapade::scenario::{Model, Override};
use escapade::theory;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

fn example(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("examples")
        .join(name)
}

fn spec(key: &str, from: f64, to: f64, points: usize, log: bool) -> Spec {
    Spec {
        key: key.into(),
        from,
        to,
        points,
        log,
    }
}

fn tmp(name: &str) -> PathBuf {
    std::env::temp_dir().join(format!("escapade-scan-{}-{name}", std::process::id()))
}

/// `escapade scan FILE --vary KEY --from A --to B --points N MORE…` with `range` = "KEY A B N".
fn scan_cli(file: &Path, range: &str, more: &[&str]) -> Vec<u8> {
    let r: Vec<&str> = range.split_whitespace().collect();
    let mut args = vec![
        "scan",
        file.to_str().unwrap(),
        "--vary",
        r[0],
        "--from",
        r[1],
        "--to",
        r[2],
        "--points",
        r[3],
    ];
    args.extend_from_slice(more);
    run(&args)
}

fn run(args: &[&str]) -> Vec<u8> {
    let out = Command::cargo_bin("escapade")
        .unwrap()
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out.stdout
}

// Common practice, no source: the scan must report exactly the numbers of single `rate` runs.
#[test]
fn csv_values_equal_what_rate_prints() {
    let f = example("double_well_reduced.toml");
    let csv = tmp("rate.csv");
    scan_cli(
        &f,
        "particle.friction 0.05 20 4",
        &["--log", "--csv", csv.to_str().unwrap(), "--quiet"],
    );
    let text = std::fs::read_to_string(&csv).unwrap();
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let mut rows = 0;
    for line in lines {
        let cells: Vec<&str> = line.split(',').collect();
        let v = cells[0];
        let j: Value = serde_json::from_slice(&run(&[
            "rate",
            f.to_str().unwrap(),
            "--json",
            "--set",
            &format!("particle.friction={v}"),
        ]))
        .unwrap();
        for key in ["tst", "kramers", "turnover", "mfpt", "smoluchowski"] {
            let col = head.iter().position(|h| *h == key).unwrap();
            let from_csv: f64 = cells[col].parse().unwrap();
            assert_eq!(from_csv, j["rates"][key].as_f64().unwrap(), "{key} at {v}");
        }
        rows += 1;
    }
    assert_eq!(rows, 4);
    let _ = std::fs::remove_file(csv);
}

fn svg_checks(svg: &str, labels: &[&str], markers: usize) {
    let doc = roxmltree::Document::parse(svg).expect("well-formed XML");
    let text: String = doc
        .descendants()
        .filter(|n| n.is_text())
        .map(|n| n.text().unwrap_or_default().to_string())
        .collect::<Vec<_>>()
        .join("\n");
    for l in labels {
        assert!(text.contains(l), "label {l:?} missing");
    }
    // simulated points and survey points (svg.rs module doc: classes "marker sim" and "point")
    let circles = doc
        .descendants()
        .filter(|n| {
            n.attribute("class")
                .is_some_and(|c| c == "marker sim" || c == "point")
        })
        .count();
    assert_eq!(circles, markers, "data markers");
}

#[test]
fn scan_pictures_are_well_formed_with_labels_and_markers() {
    let f = example("double_well_reduced.toml");
    let svg = tmp("fric.svg");
    // 3 simulated points
    scan_cli(
        &f,
        "particle.friction 0.1 10 3",
        &[
            "--log",
            "--simulate",
            "--set",
            "simulation.trajectories=60",
            "--plot",
            svg.to_str().unwrap(),
            "--quiet",
        ],
    );
    svg_checks(
        &std::fs::read_to_string(&svg).unwrap(),
        &[
            "γ/ω_b",
            "k / k_TST",
            "turnover",
            "overdamped",
            "Mel'nikov-Meshkov",
        ],
        3,
    );
    // Arrhenius plot: theory only, so no simulated points; the fit is in the legend
    let f = example("isomerization_kjmol.toml");
    scan_cli(
        &f,
        "units.temperature 280 360 5",
        &["--plot", svg.to_str().unwrap(), "--quiet"],
    );
    svg_checks(
        &std::fs::read_to_string(&svg).unwrap(),
        &["1000 / T (1/K)", "ln(k · ps)", "Ea ="],
        0,
    );
    let _ = std::fs::remove_file(svg);
}

// Harmonic TST k = (ω_a/2π) e^{−E_b/kT} is exactly Arrhenius when energies, lengths, masses and
// times are physical (ω_a then does not depend on T): the fit must return E_a = E_b and
// A = ω_a/2π (closed form; tolerance 1e-8 from rounding in ln k over the scan).
#[test]
fn arrhenius_fit_recovers_an_exact_arrhenius_rate() {
    let f = example("isomerization_kjmol.toml");
    let spec = spec("units.temperature", 250.0, 400.0, 7, false);
    let r = scan::run(
        &escapade::scenario::FileVariants {
            file: &f,
            base: &[],
        },
        &spec,
        false,
        1,
        &AtomicBool::new(false),
    )
    .unwrap();
    let fit = r.fits.iter().find(|x| x.rate == "tst").unwrap();
    let m = Model::load(&f, &[Override::parse("units.temperature=300").unwrap()]).unwrap();
    let t = theory::analyse(&m.system).unwrap();
    let eb = m.units.energy_from_kt(t.landscape.barrier_height);
    let a = t.landscape.omega_reactant.unwrap() / (2.0 * std::f64::consts::PI);
    assert!(
        (fit.value / eb - 1.0).abs() < 1e-8,
        "Ea {} vs Eb {eb}",
        fit.value
    );
    assert!(
        (fit.prefactor / a - 1.0).abs() < 1e-8,
        "A {} vs {a}",
        fit.prefactor
    );
    assert!(fit.value_ci95[0] <= fit.value && fit.value <= fit.value_ci95[1]);
    // with γ fixed, δ = γ I_b/kT makes the energy-diffusion prefactor ∝ 1/T: ln k = −ln T − E_b/kT
    // + const (closed form), so the fitted E_a is E_b minus k_B times the least-squares slope of
    // −ln T against 1/T over the scan's temperatures (≈ k_B · 313 K)
    let ed = r
        .fits
        .iter()
        .find(|x| x.rate == "energy_diffusion")
        .unwrap();
    let ts: Vec<f64> = r.points.iter().map(|p| p.value).collect();
    let x: Vec<f64> = ts.iter().map(|t| 1.0 / t).collect();
    let y: Vec<f64> = ts.iter().map(|t| -t.ln()).collect();
    let slope = escapade::fit::line(&x, &y, None).unwrap().slope;
    let kb_unit = m.units.energy_from_kt(1.0) / 300.0; // k_B in kJ/mol per K
    let want = eb - slope * kb_unit;
    assert!(
        (ed.value / want - 1.0).abs() < 1e-8,
        "{} vs {want}",
        ed.value
    );
    assert!(
        r.notes
            .iter()
            .any(|n| n.contains("apparent activation energy"))
    );
}

// The Mel'nikov–Meshkov rate's maximum over γ, located on a fine grid of direct theory runs, must
// lie between the scan points next to the scan's own maximum (common practice, no source).
#[test]
fn friction_scan_turnover_maximum_is_where_theory_puts_it() {
    let f = example("double_well_reduced.toml");
    let spec = spec("particle.friction", 0.01, 100.0, 25, true);
    let r = scan::run(
        &escapade::scenario::FileVariants {
            file: &f,
            base: &[],
        },
        &spec,
        false,
        1,
        &AtomicBool::new(false),
    )
    .unwrap();
    let ks: Vec<f64> = r.points.iter().map(|p| p.rates.turnover.unwrap()).collect();
    let i = (0..ks.len())
        .max_by(|&a, &b| ks[a].total_cmp(&ks[b]))
        .unwrap();
    assert!(i > 0 && i + 1 < ks.len(), "the maximum is inside the scan");
    let (lo, hi) = (r.points[i - 1].value, r.points[i + 1].value);
    let mut best = (0.0, 0.0);
    for j in 0..=400 {
        let g = (lo.ln() + (hi.ln() - lo.ln()) * f64::from(j) / 400.0).exp();
        let m = Model::load(
            &f,
            &[Override::parse(&format!("particle.friction={g:?}")).unwrap()],
        )
        .unwrap();
        let k = theory::analyse(&m.system).unwrap().rates.turnover.unwrap();
        if k > best.1 {
            best = (g, k);
        }
    }
    assert!(
        best.0 > lo && best.0 < hi,
        "max at {} outside ({lo}, {hi})",
        best.0
    );
    assert!(best.1 >= ks[i]);
}

#[test]
fn survey_survival_and_force_pictures_are_well_formed() {
    let svg = tmp("more.svg");
    // survey: reactant, barrier and target (the product minimum is the target) marked
    let f = example("isomerization_kjmol.toml");
    run(&[
        "survey",
        f.to_str().unwrap(),
        "--plot",
        svg.to_str().unwrap(),
    ]);
    svg_checks(
        &std::fs::read_to_string(&svg).unwrap(),
        &[
            "x (nm)",
            "U − U(reactant) (kJ/mol)",
            "reactant",
            "barrier",
            "target",
            "1 kT",
        ],
        3,
    );
    // survival curve of a brute-force run
    let f = example("double_well_reduced.toml");
    run(&[
        "simulate",
        f.to_str().unwrap(),
        "--quiet",
        "--set",
        "simulation.trajectories=200",
        "--plot",
        svg.to_str().unwrap(),
    ]);
    svg_checks(
        &std::fs::read_to_string(&svg).unwrap(),
        &["t (τ)", "S(t)", "simulated", "exp(−k t)"],
        0,
    );
    // force scan with the fitted distance in the legend
    let f = example("hopping_washboard.toml");
    scan_cli(
        &f,
        "potential.tilt 0 2 5",
        &["--plot", svg.to_str().unwrap(), "--quiet"],
    );
    svg_checks(
        &std::fs::read_to_string(&svg).unwrap(),
        &["tilt force (kT/L)", "ln(k · τ)", "x‡ ="],
        0,
    );
    let _ = std::fs::remove_file(svg);
}

// Bell's model (Bell, Science 200, 618 (1978)): ln k rises with the force as F x‡/kT, x‡ the
// distance from the well to the barrier, L/2 for an untilted washboard of period L. Under a force
// the well and the barrier top each move by F/(A k²) (k = 2π/L, closed form for small F), which
// shortens x‡ by about 2.5% of L/2 at the scan's mean force of 1 kT/L: allowed 5%.
#[test]
fn force_fit_gives_the_distance_to_the_barrier() {
    let f = example("hopping_washboard.toml");
    let spec = spec("potential.tilt", 0.0, 2.0, 5, false);
    let r = scan::run(
        &escapade::scenario::FileVariants {
            file: &f,
            base: &[],
        },
        &spec,
        false,
        1,
        &AtomicBool::new(false),
    )
    .unwrap();
    let fit = r.fits.iter().find(|x| x.rate == "mfpt").unwrap();
    assert!((fit.value / 0.5 - 1.0).abs() < 0.05, "x‡ = {}", fit.value);
}
