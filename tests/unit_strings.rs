//! Scenario values typed with a unit ("5 /ps", "35 kJ/mol"): the same results as the plain numbers
//! they stand for, in files and through --set; one-line errors for a unit of the wrong dimension;
//! Stokes' law for D; a table with a D column needing no [particle].
//!
//! Conversion factors are SI definitions (prefixes, 1 cal = 4.184 J) and CODATA 2018 values;
//! each is named beside its use.

mod common;

use escapade::potential::Diffusion;
use escapade::scenario::Model;
use escapade::theory;
use escapade::units::{Kind, UnitNames, UnitScale, read_quantity};
use proptest::prelude::*;
use std::path::{Path, PathBuf};

/// A fresh folder for this test's files.
fn folder(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("escapade-units-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn write(dir: &Path, name: &str, text: &str) -> String {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p.display().to_string()
}

/// Runs the binary, expecting a user error: exit 2, nothing on stdout, one line on stderr.
fn one_line_error(args: &[&str]) -> String {
    let out = assert_cmd::Command::cargo_bin("escapade")
        .unwrap()
        .env_remove("RUST_BACKTRACE")
        .args(args)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
    assert!(out.stdout.is_empty(), "{args:?}");
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    assert!(!err.contains("panicked"), "{err}");
    err
}

/// Asserts that `e` contains every one of `wants`.
fn says(e: &str, wants: &[&str]) {
    for w in wants {
        assert!(e.contains(w), "{w:?} missing in: {e}");
    }
}

const PLAIN: &str = r#"
[units]
energy = "kJ/mol"
length = "nm"
time = "ps"
mass = "amu"
temperature = 300.0
[particle]
mass = 12.0
friction = 20.0
[potential]
family = "double-well"
barrier = 20.92
half_width = 0.05
domain = [-0.15, 0.15]
[states]
start = -0.05
[simulation]
dt = 0.002
max_time = 1500.0
flux_time = 0.5
interfaces = [-0.02, 0.0, 0.05]
"#;

// The same numbers typed in other units; every factor is an exact decimal: 1 kcal = 4.184 kJ
// (thermochemical calorie), g/mol = Da = the scenario's amu, SI prefixes.
const TYPED: &str = r#"
[units]
energy = "kJ/mol"
length = "nm"
time = "ps"
mass = "amu"
temperature = "300 K"
[particle]
mass = "12 g/mol"
friction = "2e13 s^-1"
[potential]
family = "double-well"
barrier = "5 kcal/mol"
half_width = "0.5 angstrom"
domain = ["-1.5 Å", "150 pm"]
[states]
start = "-50 pm"
[simulation]
dt = "2 fs"
max_time = "1.5 ns"
flux_time = "500 fs"
interfaces = ["-0.2 angstrom", "0 nm", "0.05 nm"]
"#;

// Bitwise: each string converts to the double nearest its exact value, which is the double of the
// plain decimal (5 * 4.184 = 20.92 exactly, 0.5 angstrom = 0.05 nm exactly, ...).
#[test]
fn unit_strings_give_the_plain_numbers_bitwise() {
    let dir = folder("bitwise");
    let plain = write(&dir, "plain.toml", PLAIN);
    let typed = write(&dir, "typed.toml", TYPED);
    let a = common::json(&["rate", &plain, "--json"]);
    let b = common::json(&["rate", &typed, "--json"]);
    assert_eq!(a, b);
    // the --set forms: a bare unit string, and a quoted one
    let c = common::json(&[
        "rate",
        &plain,
        "--json",
        "--set",
        "particle.friction=2e13 /s",
        "--set",
        "potential.barrier=\"20920 J/mol\"",
    ]);
    assert_eq!(a, c);
    // the simulation keys (not in rate's output)
    let (m, _) = common::model(TYPED, &[]);
    let s = m.simulation.unwrap();
    assert_eq!(s.dt, Some(0.002));
    assert_eq!(s.max_time, Some(1500.0));
    assert_eq!(s.flux_time, Some(0.5));
    assert_eq!(s.interfaces, Some(vec![-0.02, 0.0, 0.05]));
    std::fs::remove_dir_all(&dir).ok();
}

// Energy given in kJ/mol in a kT scenario: E/kT = 20920 / (N_A k_B 300) reached by two roundings
// orders (exact then rounded once, or the f64 chain of units.rs), a few ulp apart (1e-15
// relative); the rates carry that times E_b/kT ≈ 8.4 through exp(−E_b/kT), so 1e-12 relative is
// ample and still fails for any wrong factor.
#[test]
fn energies_in_kt_scenarios_match_to_rounding() {
    let (_, a) = common::model(PLAIN, &[]);
    let (_, b) = common::model(
        PLAIN,
        &["units.energy=kT", "potential.barrier=20.92 kJ/mol"],
    );
    let rel = |x: f64, y: f64| ((x - y) / y).abs();
    let (ea, eb) = (a.landscape.barrier_height, b.landscape.barrier_height);
    assert!(rel(ea, eb) < 1e-14, "E_b/kT {ea} vs {eb}");
    let (ka, kb) = (a.rates.kramers.unwrap(), b.rates.kramers.unwrap());
    assert!(rel(ka, kb) < 1e-12, "Kramers {ka} vs {kb}");
    let (ma, mb) = (a.mfpt.ln_time, b.mfpt.ln_time);
    assert!((ma - mb).abs() < 1e-12 * ma.abs(), "ln MFPT {ma} vs {mb}");
}

#[test]
fn a_unit_of_the_wrong_dimension_is_one_line_naming_the_key() {
    let dir = folder("dimension");
    let bad = write(
        &dir,
        "bad.toml",
        &TYPED.replace("friction = \"2e13 s^-1\"", "friction = \"1.5 nm\""),
    );
    let e = one_line_error(&["rate", &bad]);
    says(
        &e,
        &[
            "bad.toml",
            "line 10",
            "particle.friction",
            "expected a rate",
            "found a length",
        ],
    );
    let plain = write(&dir, "plain.toml", PLAIN);
    let e = one_line_error(&["rate", &plain, "--set", "particle.mass=12 nm"]);
    says(&e, &["particle.mass", "expected a mass"]);
    let e = one_line_error(&[
        "rate",
        &plain,
        "--set",
        "potential.domain=[\"-1 nm\", \"2 ps\"]",
    ]);
    says(&e, &["potential.domain", "entry 2"]);
    // an energy against kT without a temperature says what is missing
    // a double well in kT and reduced lengths, with the two values as given
    let well = |name: &str, barrier: &str, half_width: &str| {
        let text = format!(
            "[particle]\ndiffusion = 1.0\n[potential]\nfamily = \"double-well\"\nbarrier = {barrier}\nhalf_width = {half_width}\n"
        );
        write(&dir, name, &text)
    };
    let e = one_line_error(&["rate", &well("no_t.toml", "\"35 kJ/mol\"", "1.0")]);
    says(&e, &["potential.barrier", "needs units.temperature"]);
    // a physical unit in a reduced scenario
    let e = one_line_error(&["rate", &well("reduced.toml", "\"5 kT\"", "\"1 nm\"")]);
    says(&e, &["potential.half_width", "units.length is \"1\""]);
    std::fs::remove_dir_all(&dir).ok();
}

const STOKES: &str = r#"
[units]
length = "um"
time = "s"
temperature = 298.15
[particle]
viscosity = "0.89 mPa s"
radius = "0.5 um"
[potential]
family = "double-well"
barrier = 5.0
half_width = 1.0
"#;

// Stokes–Einstein, common practice: D = k_B T/(6π η r); water at 298.15 K (η = 0.89 mPa s) and
// r = 0.5 µm give D ≈ 0.49 µm²/s. The hand computation below is in SI (k_B from CODATA 2018);
// the model's path rounds differently (kT in the energy unit, η converted to kT·s/µm³), a few
// roundings of 1.1e-16 each, hence 1e-14.
#[test]
fn stokes_law_gives_d() {
    let hand = 1.380_649e-23 * 298.15 / (6.0 * std::f64::consts::PI * 0.89e-3 * 0.5e-6); // m²/s
    let (m, _) = common::model(STOKES, &[]);
    let d = m.system.diffusion.constant().unwrap();
    assert!(
        ((d - hand * 1e12) / d).abs() < 1e-14,
        "{d} vs {}",
        hand * 1e12
    );
    assert!((0.4907..0.4908).contains(&d), "{d}");
    // molecular units, the viscosity a plain number in kJ/mol·ps/nm³: 0.89 mPa s = 0.89e-3 J s/m³
    // = 0.89e-3 · (N_A/1e3) · 1e12 / 1e27 = 535.97052764 (N_A = 6.02214076e23, exact); D in nm²/ps
    let (m, _) = common::model(
        STOKES,
        &[
            "units.energy=kJ/mol",
            "units.length=nm",
            "units.time=ps",
            "particle.viscosity=535.97052764",
            "particle.radius=500",
        ],
    );
    let d = m.system.diffusion.constant().unwrap();
    assert!(
        ((d - hand * 1e6) / d).abs() < 1e-14,
        "{d} vs {}",
        hand * 1e6
    );
    // with a mass, γ = kT/(m D) = 6π η r/m (a rate, 1/s here), as with particle.diffusion
    let (m, _) = common::model(STOKES, &["units.mass=kg", "particle.mass=2e-15 kg"]);
    let f = m.system.friction.unwrap();
    let want = 6.0 * std::f64::consts::PI * 0.89e-3 * 0.5e-6 / 2e-15; // 1/s
    assert!(((f - want) / want).abs() < 1e-14, "{f} vs {want}");
}

#[test]
fn stokes_keys_exclude_friction_and_diffusion() {
    let dir = folder("stokes");
    let f = write(&dir, "stokes.toml", STOKES);
    let e = one_line_error(&["rate", &f, "--set", "particle.diffusion=0.5"]);
    says(&e, &["particle.viscosity", "particle.diffusion"]);
    let e = one_line_error(&["rate", &f, "--set", "particle.friction=5 /s"]);
    says(&e, &["particle.viscosity", "particle.friction"]);
    let only = write(
        &dir,
        "only.toml",
        &STOKES.replace("radius = \"0.5 um\"\n", ""),
    );
    let e = one_line_error(&["rate", &only]);
    says(&e, &["particle.radius", "Stokes"]);
    let e = one_line_error(&["rate", &f, "--set", "particle.viscosity=0.89 mPa"]);
    says(&e, &["expected a viscosity"]);
    std::fs::remove_dir_all(&dir).ok();
}

/// A double well tabulated with a position-dependent D column.
fn d_table(dir: &Path) {
    let mut text = String::from("x,U,D\n");
    for i in 0..=400 {
        let x = -2.0 + 4.0 * f64::from(i) / 400.0;
        let u = 5.0 * (x * x - 1.0) * (x * x - 1.0);
        text.push_str(&format!("{x},{u},{}\n", 0.5 + 0.2 * x * x));
    }
    write(dir, "d.csv", &text);
}

// Before this change a scenario like this one failed with "the [particle] section is required".
#[test]
fn a_table_with_d_needs_no_particle_section() {
    let dir = folder("table");
    d_table(&dir);
    let bare = "[potential]\ntable = \"d.csv\"\n";
    let m = Model::from_text(bare, "bare", &dir, &[]).unwrap();
    assert!(matches!(m.system.diffusion, Diffusion::Table(_)));
    assert_eq!(m.system.mass, None);
    let f = write(&dir, "bare.toml", bare);
    let empty = write(&dir, "empty.toml", &format!("[particle]\n{bare}"));
    assert_eq!(
        common::json(&["rate", &f, "--json"]),
        common::json(&["rate", &empty, "--json"])
    );
    // underdamped dynamics still needs a mass, and says so
    let e = one_line_error(&["simulate", &f, "--set", "simulation.dynamics=underdamped"]);
    says(&e, &["particle.mass"]);
    // with a mass the friction of the inertial rates is kT/(m D(x_b)), D at the barrier x = 0
    let with_mass =
        Model::from_text(&format!("[particle]\nmass = 2.0\n{bare}"), "m", &dir, &[]).unwrap();
    let t = theory::analyse(&with_mass.system).unwrap();
    let d_b = with_mass.system.diffusion.value(t.landscape.barrier);
    assert_eq!(t.friction, Some(1.0 / (2.0 * d_b)));
    // without a D column the section is still required
    let plain = "x,U\n-2,45\n-1,0\n0,5\n1,0\n2,45\n";
    write(&dir, "p.csv", plain);
    let e = Model::from_text("[potential]\ntable = \"p.csv\"\n", "s.toml", &dir, &[])
        .unwrap_err()
        .to_string();
    says(&e, &["[particle] section is required"]);
    std::fs::remove_dir_all(&dir).ok();
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2000, ..ProptestConfig::default() })]

    // Any text, and text shaped like a quantity, is a value or an error: never a panic, never a
    // non-finite value (common practice, no source).
    #[test]
    fn quantity_strings_never_panic(
        any in ".{0,40}",
        shaped in "[-+]?[0-9]{0,4}[.]?[0-9]{0,3}(e[-+]?[0-9]{1,3})? ?(k|m|u|µ|n|p|f|/|\\*| |\\^|-|[0-9]|²|⁻|¹|J|s|g|Da|mol|eV|kT|Pa|cP|K|N|Å|angstrom){0,8}",
    ) {
        let scale = UnitScale::new(
            &UnitNames { energy: "kJ/mol".into(), length: "nm".into(), time: "ps".into(), mass: "amu".into() },
            Some(300.0),
        ).unwrap();
        for t in [&any, &shaped] {
            for kind in [Kind::Energy, Kind::Length, Kind::Rate, Kind::Diffusion, Kind::Viscosity, Kind::Force] {
                if let Ok(x) = read_quantity(t, kind, &scale) {
                    prop_assert!(x.is_finite(), "{t:?} -> {x}");
                }
            }
        }
    }

    // A power-of-ten factor only moves the decimal exponent, so "m·10^e um" in nm must be the
    // double of "m·10^(e+3)" (SI prefixes): the conversion is rounded once, like the parser.
    #[test]
    fn prefix_conversions_are_the_shifted_decimal(m in 1u64..100_000_000_000_000_000, e in -40i32..40) {
        let scale = UnitScale::new(
            &UnitNames { length: "nm".into(), time: "fs".into(), ..UnitNames::default() },
            None,
        ).unwrap();
        let x = read_quantity(&format!("{m}e{e} um"), Kind::Length, &scale).unwrap();
        prop_assert_eq!(x, format!("{m}e{}", e + 3).parse::<f64>().unwrap());
        let r = read_quantity(&format!("{m}e{e} /ps"), Kind::Rate, &scale).unwrap();
        prop_assert_eq!(r, format!("{m}e{}", e - 3).parse::<f64>().unwrap());
    }
}
