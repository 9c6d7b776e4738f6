//! Limits and closed forms of the rate formulas, through the scenario pipeline.
//! Sources: Kramers, Physica 7, 284 (1940) and Hänggi, Talkner & Borkovec, Rev. Mod. Phys. 62, 251
//! (1990) for the γ → 0 and γ → ∞ limits; PHYSICS.md §10 (closed-form quartic action); Mel'nikov,
//! Phys. Rep. 209, 1 (1991) for A(δ) → δ and → 1.

use escapade::scenario::{Model, Override};
use escapade::theory::{self, TheoryReport};
use std::f64::consts::PI;
use std::path::Path;

const DW: &str = "[particle]\nmass = 1.3\nfriction = 1.0\n[potential]\nfamily = \"double-well\"\nbarrier = 9.0\nhalf_width = 1.2\n[states]\nstart = -1.0\n";

fn run(sets: &[&str]) -> TheoryReport {
    let o: Vec<Override> = sets.iter().map(|s| Override::parse(s).unwrap()).collect();
    let m = Model::from_text(DW, "dw", Path::new("."), &o).unwrap();
    theory::analyse(&m.system).unwrap()
}

// Closed forms for the quartic well (PHYSICS.md §10): ω_a = sqrt(8 Eb/(m a²)), ω_b = ω_a/√2,
// I_b = 16 Eb/(3 ω_b); harmonic TST (ω_a/2π) e^{-Eb}; energy diffusion γ I_b (ω_a/2π) e^{-Eb}.
// Tolerance 1e-10: everything is closed form but the quadrature of I_b (~1e-14).
#[test]
fn harmonic_and_energy_diffusion_closed_forms() {
    let t = run(&[]);
    let (eb, a, m, g) = (9.0f64, 1.2f64, 1.3f64, 1.0f64);
    let wa = (8.0 * eb / (m * a * a)).sqrt();
    let ib = 16.0 * eb / (3.0 * wa / 2f64.sqrt());
    let tst = wa / (2.0 * PI) * (-eb).exp();
    assert!((t.rates.tst.unwrap() / tst - 1.0).abs() < 1e-10);
    let ed = g * ib * tst;
    assert!((t.rates.energy_diffusion.unwrap() / ed - 1.0).abs() < 1e-10);
    // Smoluchowski: D sqrt(U''_a |U''_b|)/(2π) e^{-Eb}, D = 1/(m γ), U''_a = 8Eb/a², |U''_b| = 4Eb/a²
    let smol = 1.0 / (m * g) * (32.0f64).sqrt() * eb / (a * a) / (2.0 * PI) * (-eb).exp();
    assert!((t.rates.smoluchowski.unwrap() / smol - 1.0).abs() < 1e-10);
}

// γ → 0: λ₊/ω_b = 1 − γ/(2ω_b) + …, so at γ = 1e-7 Kramers equals TST to 1e-7; A(δ) → δ so the
// turnover rate approaches energy diffusion with relative correction 0.82 sqrt(δ) (δ ~ 1e-6 here,
// so 1e-3 tolerance with a factor ~1.2 margin).
#[test]
fn weak_friction_limits() {
    let t = run(&["particle.friction=1e-7"]);
    assert!((t.rates.kramers.unwrap() / t.rates.tst.unwrap() - 1.0).abs() < 1e-7);
    let r = t.rates.turnover.unwrap() / t.rates.energy_diffusion.unwrap();
    assert!((r - 1.0).abs() < 1.2e-3, "{r}");
    assert_eq!(t.regime.name.as_str(), "energy-diffusion");
}

// γ → ∞: λ₊ = ω_b²/γ (1 − ω_b²/γ² + …), so at γ = 1e5 ω_b Kramers equals Smoluchowski to 1e-10;
// A(δ) = 1 to far below 1e-12 (1 − A ~ e^{−δ/4}); 1e-9 leaves room for rounding.
#[test]
fn strong_friction_limits() {
    let t = run(&["particle.friction=1e6"]);
    assert!((t.rates.kramers.unwrap() / t.rates.smoluchowski.unwrap() - 1.0).abs() < 1e-9);
    assert!((t.rates.turnover.unwrap() / t.rates.kramers.unwrap() - 1.0).abs() < 1e-12);
    assert_eq!(t.regime.name.as_str(), "overdamped");
}

// Exact 1-D TST → harmonic TST with corrections O(kT/Eb) (HTB 1990 Sec. II): the ratio
// approaches 1 monotonically; at 200 kT within 1%, and closer than at 20 kT.
#[test]
fn exact_tst_approaches_harmonic_at_high_barriers() {
    let r = |eb: &str| {
        let t = run(&[&format!("potential.barrier={eb}")]);
        t.rates.tst_exact.unwrap() / t.rates.tst.unwrap()
    };
    let (r20, r200) = (r("20"), r("200"));
    assert!((r200 - 1.0).abs() < 0.01, "{r200}");
    assert!((r200 - 1.0).abs() < (r20 - 1.0).abs());
}

// Overdamped, high barrier: 1/MFPT(reactant minimum → product minimum) → k_Smoluchowski with
// corrections O(kT/Eb) (HTB 1990 Sec. IV.B; PHYSICS.md §2). At 40 kT within 4%.
#[test]
fn mfpt_rate_approaches_smoluchowski() {
    let t = run(&["potential.barrier=40", "particle.friction=100"]);
    let r = t.rates.mfpt.unwrap() / t.rates.smoluchowski.unwrap();
    assert!((r - 1.0).abs() < 0.04, "{r}");
    // and the MFPT stays finite and accurate at 200 kT (no overflow): e^200 ~ 1e87
    let t = run(&["potential.barrier=200"]);
    assert!(t.mfpt.time.is_finite() && t.mfpt.ln_time > 190.0);
    assert!(t.rates.tst.unwrap() > 0.0 && t.rates.turnover.unwrap() > 0.0);
}

// Mel'nikov's well-to-well factor A(δ₁)A(δ₂)/A(δ₁+δ₂) (Mel'nikov, Phys. Rep. 209, 1 (1991)): in
// a symmetric double well the transition rate equals the escape rate at high friction (A → 1) and
// is half of it at weak friction (A(δ) ≈ δ, so δ²/(2δ) = δ/2, against A(δ) ≈ δ for the escape):
// 1e-3 covers the O(sqrt(δ)) corrections at δ ~ 1e-6.
#[test]
fn well_to_well_against_escape_in_a_symmetric_well() {
    let strong = run(&["particle.friction=1e4"]);
    let r = strong.rates.well_to_well.unwrap() / strong.rates.turnover.unwrap();
    assert!((r - 1.0).abs() < 1e-9, "{r}");
    let weak = run(&["particle.friction=1e-7"]);
    let r = weak.rates.well_to_well.unwrap() / weak.rates.turnover.unwrap();
    assert!((r - 0.5).abs() < 1e-3, "{r}");
}

// Grote–Hynes (Grote & Hynes, J. Chem. Phys. 73, 2715 (1980)): a vanishing memory time gives
// Kramers' rate; a memory much longer than 1/ω_b leaves the barrier crossing nearly frictionless,
// so the rate approaches TST. Closed-form limits of the cubic; tolerances from the τ used.
#[test]
fn grote_hynes_limits_through_the_scenario() {
    let short = run(&["particle.memory_time=1e-9"]);
    let r = short.rates.grote_hynes.unwrap() / short.rates.kramers.unwrap();
    assert!((r - 1.0).abs() < 1e-6, "{r}");
    let long = run(&["particle.memory_time=1e6"]);
    let r = long.rates.grote_hynes.unwrap() / long.rates.tst.unwrap();
    assert!((r - 1.0).abs() < 1e-4, "{r}");
    // no memory time: the key is there and null
    assert!(run(&[]).rates.grote_hynes.is_none());
}
