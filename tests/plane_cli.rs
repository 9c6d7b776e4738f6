//! Two-coordinate scenarios through `survey` and `rate` (the binary, JSON output): the
//! Müller–Brown example, a separable surface against the 1-D results, a grid table, and the
//! commands that do not read two-coordinate scenarios yet.

mod common;

use common::{example, json};
use escapade::potential::{Diffusion, Family};
use escapade::theory::mfpt;
use serde_json::Value;
use std::path::PathBuf;

/// A scenario written to a fresh folder of the target directory (with optional extra files).
fn scenario(name: &str, text: &str, extra: &[(&str, &str)]) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(format!("plane_cli_{name}"));
    std::fs::create_dir_all(&dir).unwrap();
    for (f, t) in extra {
        std::fs::write(dir.join(f), t).unwrap();
    }
    let p = dir.join(format!("{name}.toml"));
    std::fs::write(&p, text).unwrap();
    p
}

fn reference() -> Value {
    let p = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/reference/surface2d_values.json"
    );
    serde_json::from_str::<Value>(&std::fs::read_to_string(p).unwrap()).unwrap()["separable"]
        .clone()
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn rel(a: f64, b: f64) -> f64 {
    (a / b - 1.0).abs()
}

/// The separable surface of reference/surface2d.py: U = E (x² − 1)² + k y²/2, E = 4, k = 4, on
/// the box [−2, 4] × [−1.5, 1.5].
const SEPARABLE: &str = r#"
[surface]
expr = "E*(x^2 - 1)^2 + k*y^2/2"
x = [-2, 4]
y = [-1.5, 1.5]
[surface.constants]
E = 4
k = 4
[states]
start = [-1, 0.1]
target = [1, -0.1]
"#;

/// Müller–Brown (examples/muller_brown.toml): three minima and two saddles (Müller & Brown,
/// Theor. Chim. Acta 53, 75 (1979); positions in reference/muller_brown_values.json), the
/// path through the intermediate minimum in two steps, and the rate-limiting barrier
/// 106.07 published units × 0.15 (U(saddle) − U(A) = −40.665 − (−146.700), reference values
/// rounded to 1e-3 units, so 1e-3 kT).
#[test]
fn muller_brown_survey_finds_three_minima_and_two_saddles() {
    let ex = example("muller_brown.toml");
    let j = json(&["survey", ex.to_str().unwrap(), "--json"]);
    assert_eq!(j["dimension"], 2);
    let l = &j["landscape"];
    assert_eq!(l["minima"].as_array().unwrap().len(), 3);
    assert_eq!(l["saddles"].as_array().unwrap().len(), 2);
    assert_eq!(l["path"].as_array().unwrap().len(), 2);
    assert!(
        (f(&l["barrier_kt"]) - 0.15 * (146.700 - 40.665)).abs() < 2e-3,
        "{}",
        l["barrier_kt"]
    );
    let reactant = &l["minima"][l["reactant"].as_u64().unwrap() as usize];
    assert!((f(&reactant["x"]) + 0.558).abs() < 1e-3 && (f(&reactant["y"]) - 1.442).abs() < 1e-3);
}

/// `rate` on Müller–Brown: every rate is there; 1/MFPT and the TPT rate agree (both exact for
/// the same regions up to the π_A normalisation, which differs from 1 by ~e^{−ΔU}: 1e-3 covers
/// it and the grid error, common practice, no source); overdamped Langer over the rate-limiting
/// saddle is within 30% of 1/MFPT (a 16 kT barrier with an intermediate well: the harmonic
/// approximation's error is O(kT/ΔU) plus the return from the intermediate well; measured
/// 12.6%).
#[test]
fn muller_brown_rate_reports_every_rate() {
    let ex = example("muller_brown.toml");
    let j = json(&["rate", ex.to_str().unwrap(), "--json"]);
    let r = &j["rates"];
    let (langer, mfpt, tpt) = (f(&r["langer_overdamped"]), f(&r["mfpt"]), f(&r["tpt"]));
    assert!(rel(tpt, mfpt) < 1e-3, "{tpt} {mfpt}");
    assert!(rel(langer, mfpt) < 0.3, "{langer} {mfpt}");
    assert!(r["langer"].is_null() && r["harmonic_tst"].is_null());
    let m = &j["mfpt"];
    assert!(m["converged"].as_bool().unwrap());
    assert!(m["grids"].as_array().unwrap().len() >= 3);
    assert!(f(&m["last_change"]) < 1e-3);
    assert!(f(&j["mep_1d"]["rates"]["smoluchowski"]) > 0.0);
    assert!(j["warnings"][0].as_str().unwrap().contains("intermediate"));
}

/// The separable surface with D = diag(0.7, 2): overdamped Langer equals 1-D Kramers
/// (Smoluchowski) with D_xx (reference/surface2d_values.json, mpmath; the formulas agree
/// exactly for a separable surface, so 1e-6 covers the Newton-refined stationary points); the
/// FV MFPT to the default product region x ≥ 1 equals the 1-D exact MFPT (same file; Gardiner
/// Sec. 5.2) within the 1e-3 the refinement asks (second order and halving leave about a third
/// of it); the MEP's 1-D Smoluchowski rate equals it too, within 2e-3 (the cubic spline through
/// MEP images 0.02 apart gives U'' to O(h²)·U'''' ≈ 1e-3 relative; measured 5e-5; the FV
/// MFPT measured 2.2e-4).
#[test]
fn separable_rates_equal_one_dimensional() {
    let r = reference();
    let p = scenario(
        "separable_d",
        &format!("{SEPARABLE}[particle]\ndiffusion = [0.7, 2.0]\n"),
        &[],
    );
    let j = json(&["rate", p.to_str().unwrap(), "--json"]);
    let smol = f(&r["ln_smoluchowski_diag"]).exp();
    assert!(
        rel(f(&j["rates"]["langer_overdamped"]), smol) < 1e-6,
        "{}",
        j["rates"]
    );
    let t = f(&j["mfpt"]["time"]);
    assert!(rel(t, f(&r["mfpt_diag"])) < 1e-3, "{t}");
    assert_eq!(j["mfpt"]["product_region"]["rule"], "half-plane");
    let line = &j["mep_1d"];
    assert!(rel(f(&line["diffusion"]), 0.7) < 1e-9, "{line}");
    assert!(
        rel(f(&line["rates"]["smoluchowski"]), smol) < 2e-3,
        "{line}"
    );
}

/// The separable surface with mass 1.3 and friction 2.1 (D = kT/(mγ) on both axes): Langer with
/// inertia equals Kramers' moderate-to-strong-friction rate, Vineyard's harmonic TST the 1-D
/// harmonic TST (reference/surface2d_values.json; exact for a separable surface, 1e-6 for the
/// refined stationary points); the MEP's 1-D Kramers rate equals it within 2e-3 (the spline's
/// curvatures, as above; measured 2e-5).
#[test]
fn separable_inertial_rates_equal_one_dimensional() {
    let r = reference();
    let p = scenario(
        "separable_m",
        &format!("{SEPARABLE}[particle]\nmass = 1.3\nfriction = 2.1\n"),
        &[],
    );
    let j = json(&["rate", p.to_str().unwrap(), "--json"]);
    let kr = f(&r["ln_kramers"]).exp();
    assert!(rel(f(&j["rates"]["langer"]), kr) < 1e-6, "{}", j["rates"]);
    let tst = f(&r["ln_harmonic_tst"]).exp();
    assert!(
        rel(f(&j["rates"]["harmonic_tst"]), tst) < 1e-6,
        "{}",
        j["rates"]
    );
    assert!(
        rel(f(&j["mep_1d"]["rates"]["kramers"]), kr) < 2e-3,
        "{}",
        j["mep_1d"]
    );
    // the FV MFPT with D = kT/(mγ) equals the crate's 1-D exact MFPT (theory::mfpt, checked
    // against mpmath in tests/surface_theory.rs) within the refinement's 1e-3 (measured 2e-4)
    let pot = Family::DoubleWell {
        eb: 4.0,
        a: 1.0,
        domain: (-2.0, 4.0),
    };
    let d = Diffusion::Constant(1.0 / (1.3 * 2.1));
    let one_d = mfpt::mfpt(&pot, &d, -2.0, -1.0, 1.0, &[0.0]).time;
    assert!(
        rel(f(&j["mfpt"]["time"]), one_d) < 1e-3,
        "{} {one_d}",
        j["mfpt"]
    );
}

/// A grid table of the separable surface (nodes 0.05 apart) gives the formula's barrier and
/// overdamped Langer rate: the bicubic spline's U is O(h⁴) ≈ 1e-5 accurate and its Hessian
/// O(h²) ≈ 2.5e-3 relative at the stationary points, so 1e-2 on the rate (a square root of
/// curvature ratios; measured 3e-4) and 1e-3 kT on the barrier (common practice, no source).
#[test]
fn grid_table_matches_formula() {
    let mut rows = String::from("x,y,U\n");
    for i in 0..=60 {
        for k in 0..=40 {
            let (x, y) = (-1.5 + 0.05 * f64::from(i), -1.0 + 0.05 * f64::from(k));
            let u = 4.0 * (x * x - 1.0) * (x * x - 1.0) + 2.0 * y * y;
            rows.push_str(&format!("{x},{y},{u}\n"));
        }
    }
    let text = "[surface]\ntable = \"grid.csv\"\n[particle]\ndiffusion = 1.0\n";
    let p = scenario("grid", text, &[("grid.csv", &rows)]);
    let j = json(&["rate", p.to_str().unwrap(), "--json"]);
    assert!(
        (f(&j["landscape"]["barrier_kt"]) - 4.0).abs() < 1e-3,
        "{}",
        j["landscape"]["barrier_kt"]
    );
    let smol = f(&reference()["ln_smoluchowski_scalar"]).exp();
    assert!(
        rel(f(&j["rates"]["langer_overdamped"]), smol) < 1e-2,
        "{}",
        j["rates"]
    );
    assert!(j["surface"].as_str().unwrap().contains("61 x 41"));
}

/// The commands that do not read two-coordinate scenarios yet refuse them with one line and
/// exit 2; a one-coordinate scenario is unaffected (golden_json covers its output).
#[test]
fn other_commands_refuse_two_coordinates() {
    let ex = example("muller_brown.toml");
    let file = ex.to_str().unwrap();
    for args in [
        vec!["simulate", file],
        vec!["compare", file],
        vec![
            "scan",
            file,
            "--vary",
            "particle.diffusion",
            "--from",
            "1",
            "--to",
            "2",
        ],
        vec!["survey", file, "--plot", "x.svg"],
    ] {
        let out = assert_cmd::Command::cargo_bin("escapade")
            .unwrap()
            .args(&args)
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{args:?}: {err}");
        assert!(
            err.contains("not yet available for two-coordinate scenarios"),
            "{args:?}: {err}"
        );
    }
}

/// The keys of the two-coordinate JSON as the README documents them (common practice, no
/// source: our own contract).
#[test]
fn plane_json_follows_the_contract() {
    let ex = example("muller_brown.toml");
    let j = json(&["rate", ex.to_str().unwrap(), "--json"]);
    for k in [
        "dimension",
        "source",
        "title",
        "surface",
        "units",
        "temperature",
        "kt",
    ] {
        assert!(j.get(k).is_some(), "{k}");
    }
    let l = &j["landscape"];
    for k in [
        "minima",
        "saddles",
        "reactant",
        "product",
        "rate_limiting_saddle",
        "barrier",
        "barrier_kt",
        "reverse_barrier",
        "path",
        "mep",
    ] {
        assert!(l.get(k).is_some(), "landscape.{k}");
    }
    for k in ["x", "y", "u", "u_kt", "eigenvalues"] {
        assert!(l["minima"][0].get(k).is_some(), "minima.{k}");
    }
    for k in [
        "from",
        "saddle",
        "to",
        "forward_barrier",
        "backward_barrier",
        "s",
    ] {
        assert!(l["path"][0].get(k).is_some(), "path.{k}");
    }
    for k in ["s", "x", "y", "u"] {
        assert!(l["mep"]["points"][0].get(k).is_some(), "mep.points.{k}");
    }
    let groups: [(&str, &[&str]); 5] = [
        (
            "harmonic",
            &[
                "reactant_hessian",
                "saddle_hessian",
                "unstable_rate",
                "unstable_direction",
            ],
        ),
        (
            "rates",
            &["langer_overdamped", "langer", "harmonic_tst", "mfpt", "tpt"],
        ),
        (
            "mfpt",
            &[
                "start",
                "product_region",
                "time",
                "grids",
                "last_change",
                "converged",
                "tolerance",
                "max_cells",
                "observed_order",
                "extrapolated",
            ],
        ),
        (
            "tpt",
            &[
                "nx",
                "ny",
                "reactant_region",
                "reactive_frequency",
                "last_in_a",
                "rate",
            ],
        ),
        (
            "mep_1d",
            &[
                "tangent",
                "diffusion",
                "friction",
                "length",
                "barrier_kt",
                "mfpt_time",
                "rates",
            ],
        ),
    ];
    for (g, keys) in groups {
        for k in keys {
            assert!(j[g].get(k).is_some(), "{g}.{k}");
        }
    }
    assert!(j["warnings"].is_array());
    let s = json(&["survey", ex.to_str().unwrap(), "--json"]);
    assert_eq!(s["landscape"], j["landscape"]);
    assert!(s.get("rates").is_none());
}

/// Unit strings in lists, `--set` on a two-coordinate file and a disk product region: D given
/// as ["0.7 nm^2/ns", "2000 nm^2/us"] is diag(0.7, 2) nm²/ns, so overdamped Langer is the
/// reference's (reference/surface2d_values.json; 1e-6 as above); product_radius makes both
/// regions disks. The library's `Model::load` refuses the file naming `surface`, and
/// `Study::load` reads it as dimension 2.
#[test]
fn units_overrides_and_disk_regions() {
    use escapade::scenario::{Model, Override, Study};
    let text = SEPARABLE.replace(
        "[surface]",
        "[units]\nlength = \"nm\"\ntime = \"ns\"\n[surface]",
    ) + "[particle]\ndiffusion = [\"0.7 nm^2/ns\", \"2000 nm^2/us\"]\n";
    let p = scenario("units", &text, &[]);
    let file = p.to_str().unwrap();
    let j = json(&["rate", file, "--json", "--set", "states.product_radius=0.3"]);
    let smol = f(&reference()["ln_smoluchowski_diag"]).exp();
    assert!(
        rel(f(&j["rates"]["langer_overdamped"]), smol) < 1e-6,
        "{}",
        j["rates"]
    );
    assert_eq!(j["mfpt"]["product_region"]["rule"], "disk");
    assert_eq!(j["tpt"]["reactant_region"]["rule"], "disk");
    assert_eq!(f(&j["mfpt"]["product_region"]["radius"]), 0.3);
    let e = Model::load(&p, &[]).unwrap_err().to_string();
    assert!(e.contains("surface") && e.contains("two-coordinate"), "{e}");
    let o = [Override::parse("particle.diffusion=1.5").unwrap()];
    let s = Study::load(&p, &o).unwrap();
    assert_eq!(s.dimension(), 2);
    let Study::Plane(m) = s else { unreachable!() };
    assert_eq!(m.system.diffusion.0, [[1.5, 0.0], [0.0, 1.5]]);
}

/// The quartic double well U = A (x² − 1)² + 2y² on [−1.5, 1.5] × [−1, 1], D = 1.
fn high_barrier(a: f64) -> String {
    format!(
        "[surface]\nexpr = \"A*(x^2 - 1)^2 + 2*y^2\"\nx = [-1.5, 1.5]\ny = [-1, 1]\n[surface.constants]\nA = {a}\n[particle]\ndiffusion = 1.0\n"
    )
}

/// At barriers of 30 and 40 kT the MFPT system is too ill-conditioned for the sparse solve
/// (condition ~ e^{ΔU}/h²): `rate` still succeeds, reports the breakdown as a warning naming the
/// barrier, leaves the MFPT and TPT rates null and keeps the harmonic and MEP rates (our own
/// behaviour, no source).
#[test]
fn high_barrier_mfpt_breakdown_is_a_warning() {
    for a in [30.0, 40.0] {
        let p = scenario(&format!("high_barrier_{a}"), &high_barrier(a), &[]);
        let j = json(&["rate", p.to_str().unwrap(), "--json"]);
        let r = &j["rates"];
        assert!(r["mfpt"].is_null() && r["tpt"].is_null(), "A = {a}: {r}");
        assert!(f(&r["langer_overdamped"]) > 0.0, "{r}");
        assert!(f(&j["mep_1d"]["rates"]["mfpt"]) > 0.0, "{}", j["mep_1d"]);
        let w = j["warnings"].to_string();
        assert!(w.contains("kT") && w.contains("MFPT"), "{w}");
    }
}

/// The separable U = 5 (x² − 1)² + 2y² on [−2, 2]², mass [1, 4], friction 3 (so D = 1/(mγ) =
/// diag(1/3, 1/12)): the MEP is the x axis, so the 1-D MFPT along it is the 1-D MFPT of
/// 5 (x² − 1)² with D = 1/3, which the 2-D MFPT equals exactly for the half-plane product
/// region (the backward equation separates; module doc of theory::plane). 1e-3 is the
/// refinement's tolerance.
#[test]
fn mep_projection_equals_two_dimensional_on_a_separable_surface() {
    let p = scenario(
        "separable_mass",
        "[surface]\nexpr = \"5*(x^2 - 1)^2 + 2*y^2\"\nx = [-2, 2]\ny = [-2, 2]\n[particle]\nmass = [1, 4]\nfriction = 3.0\n",
        &[],
    );
    let j = json(&["rate", p.to_str().unwrap(), "--json"]);
    let (line, plane) = (f(&j["mep_1d"]["mfpt_time"]), f(&j["mfpt"]["time"]));
    assert!(rel(line, plane) < 1e-3, "{line} {plane}");
}

/// U = 5 ((x + y)²/2 − 1)² + (x − y)²: the MEP runs along (1, 1)/√2. With mass [1, 4] and
/// friction 3 the friction matrix is ζ = γM, so ζ_s/m_s = γ = 3 along any direction (exact
/// algebra; 1e-9 allows the tangent's rounding).
#[test]
fn mep_friction_is_the_scalar_friction_rate() {
    let p = scenario(
        "diagonal_mass",
        "[surface]\nexpr = \"5*((x + y)^2/2 - 1)^2 + (x - y)^2\"\nx = [-2, 2]\ny = [-2, 2]\n[particle]\nmass = [1, 4]\nfriction = 3.0\n",
        &[],
    );
    let j = json(&["rate", p.to_str().unwrap(), "--json"]);
    let g = f(&j["mep_1d"]["friction"]);
    assert!((g - 3.0).abs() < 1e-9, "{}", j["mep_1d"]);
}

/// A grid table with absent nodes: `survey` and `rate` warn how many (they forbid the cells
/// around them, which a user may not mean); the same nodes listed with U = inf draw no warning
/// (our own behaviour, no source).
#[test]
fn absent_grid_nodes_are_warned_about() {
    for (name, listed) in [("grid_absent", false), ("grid_inf", true)] {
        let mut rows = String::from("x,y,U\n");
        for i in 0..=30 {
            for k in 0..=20 {
                let (x, y) = (-1.5 + 0.1 * f64::from(i), -1.0 + 0.1 * f64::from(k));
                // two corner nodes far from the path
                let corner = (i == 0 && k == 0) || (i == 30 && k == 20);
                let u = 4.0 * (x * x - 1.0) * (x * x - 1.0) + 2.0 * y * y;
                match (corner, listed) {
                    (true, false) => {}
                    (true, true) => rows.push_str(&format!("{x},{y},inf\n")),
                    _ => rows.push_str(&format!("{x},{y},{u}\n")),
                }
            }
        }
        let text = "[surface]\ntable = \"grid.csv\"\n[particle]\ndiffusion = 1.0\n";
        let p = scenario(name, text, &[("grid.csv", &rows)]);
        for cmd in ["survey", "rate"] {
            let j = json(&[cmd, p.to_str().unwrap(), "--json"]);
            let w = j["warnings"].to_string();
            assert_eq!(w.contains("2 nodes absent"), !listed, "{name} {cmd}: {w}");
        }
    }
}

/// A `[simulation]` section is not yet read for two coordinates: survey and rate say so instead
/// of ignoring it silently (common practice, no source: no silent no-ops).
#[test]
fn an_unread_simulation_section_is_warned_about() {
    let text = "[surface]\nexpr = \"4*(x^2-1)^2 + 2*y^2\"\nx = [-1.5, 1.5]\ny = [-1, 1]\n[particle]\ndiffusion = 1.0\n";
    for (name, extra, warned) in [
        ("sim_absent", "", false),
        ("sim_given", "[simulation]\ntrajectories = 100\n", true),
    ] {
        let p = scenario(name, &format!("{text}{extra}"), &[]);
        for cmd in ["survey", "rate"] {
            let j = json(&[cmd, p.to_str().unwrap(), "--json"]);
            let w = j["warnings"].to_string();
            assert_eq!(
                w.contains("[simulation] is not read"),
                warned,
                "{name} {cmd}: {w}"
            );
        }
    }
}
