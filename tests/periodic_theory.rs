//! Periodic and tilted landscapes (src/theory/periodic.rs): the tilted-periodic wrapper, the
//! Stratonovich drift, Lifson–Jackson and Reimann effective diffusion, and hopping rates, against
//! closed forms, exact identities and mpmath values written by reference/periodic.py
//! (reference/periodic_values.json; formulas and method in reference/SOURCES.md, "Periodic").

use escapade::potential::periodic::{Periodic, WrapError};
use escapade::potential::table::Columns;
use escapade::potential::{Diffusion, Family, Formula, FormulaPotential, Potential, Table};
use escapade::theory::periodic::{PeriodicError, PeriodicTheory, analyse};
use serde_json::Value;
use std::collections::BTreeMap;

/// The period integrals converge to ~1e-11 (doubling test, PERIODIC_TOL); 1e-9 relative leaves
/// room for rounding in exponents of up to ~100 kT (100 × 1e-16 × the condition of the sums).
const QUAD_REL: f64 = 1e-9;

fn values() -> Value {
    serde_json::from_str(include_str!("../reference/periodic_values.json")).unwrap()
}

fn f(v: &Value, k: &str) -> f64 {
    v[k].as_f64().unwrap_or_else(|| panic!("{k} in {v}"))
}

fn formula(s: &str) -> Formula {
    Formula::parse(s, &BTreeMap::new()).unwrap()
}

fn diffusion(v: &Value) -> Diffusion {
    match &v["D"] {
        Value::String(s) => Diffusion::Formula(formula(s)),
        d => Diffusion::Constant(d.as_f64().unwrap()),
    }
}

/// U = −A cos(2πx/L) − F x on a domain holding a few periods.
fn washboard(amp: f64, tilt: f64, period: f64) -> Family {
    Family::Washboard {
        amp,
        period,
        tilt,
        domain: (-3.0 * period, 3.0 * period),
    }
}

fn run(pot: &dyn Potential, d: &Diffusion, period: f64) -> PeriodicTheory {
    analyse(pot, d, 0.0, period, 0.0, None, None).unwrap()
}

/// A 201-row spline table of `pot` on [0, 1] (knots every 0.005).
fn table_of(pot: &dyn Potential) -> Table {
    let n = 201;
    let xs: Vec<f64> = (0..n).map(|i| f64::from(i) / f64::from(n - 1)).collect();
    let cols = Columns {
        u: xs.iter().map(|&x| pot.u(x)).collect(),
        x: xs,
        sigma_u: None,
        d: None,
        sigma_d: None,
    };
    Table::new(&cols, 1.0)
}

fn rel(a: f64, b: f64) -> f64 {
    (a / b - 1.0).abs()
}

// Lifson & Jackson, J. Chem. Phys. 36, 2410 (1962): D_eff = D/I0(V0)² for V0 cos(2πx/L); I0 from
// mpmath (reference/periodic.py). Handbook cross-check: e^{−x} I0(x) as tabulated in Abramowitz &
// Stegun Table 9.8 (10 decimals; digits quoted from memory, and they agree with mpmath to the
// table's rounding): 0.4657596076 (x = 1), 0.2070019212 (x = 4), 0.1278333372 (x = 10).
#[test]
fn lifson_jackson_matches_bessel_i0() {
    let v = values();
    let handbook = [
        (1.0, 0.465_759_607_6),
        (4.0, 0.207_001_921_2),
        (10.0, 0.127_833_337_2),
    ];
    for case in v["lifson_jackson"].as_array().unwrap() {
        let v0 = f(case, "V0");
        let d = diffusion(case);
        let pot = FormulaPotential::new(formula(case["U"].as_str().unwrap()), 1.0, (-3.0, 3.0));
        let t = run(&pot, &d, 1.0);
        let want = f(case, "D_eff");
        let got = t.effective_diffusion_untilted;
        println!("LJ V0 = {v0} D = {}: {got:.15e} vs {want:.15e}", case["D"]);
        assert!(rel(got, want) < QUAD_REL, "{got} {want}");
        assert_eq!(t.tilt, 0.0);
        assert_eq!(t.drift, 0.0);
        assert!(rel(t.effective_diffusion.unwrap(), want) < QUAD_REL);
        if let Some(&(_, e)) = handbook.iter().find(|(x, _)| *x == v0) {
            // the table's 10 decimals: |Δ(e^{-x} I0)| ≤ 5e-11, relative ≤ 4e-10, doubled in I0²
            let i0 = e * v0.exp();
            assert!(rel(got, 1.0 / (i0 * i0)) < 1e-9, "A&S: {}", 1.0 / (i0 * i0));
            assert!((f(case, "exp_minus_V0_I0") - e).abs() < 5.1e-11);
        }
    }
}

// Free drift (V = 0): v = D F and D_eff = D exactly (closed form of the Stratonovich formula).
#[test]
fn free_drift_is_d_times_f() {
    for (tilt, d) in [(1.3, 0.7), (-40.0, 2.0), (250.0, 0.1)] {
        let t = run(&washboard(0.0, tilt, 1.0), &Diffusion::Constant(d), 1.0);
        println!(
            "free F = {tilt}: v/(DF) - 1 = {:.1e}",
            t.drift / (d * tilt) - 1.0
        );
        // closed form; only rounding (the integrals are exact for exponentials to ~1e-13)
        assert!(rel(t.drift, d * tilt) < 1e-10);
        assert!(rel(t.effective_diffusion.unwrap(), d) < 1e-10);
        assert!(t.hopping.is_none());
    }
}

// Stratonovich drift against mpmath: the Fourier–Bessel series of the double integral (cosine
// cases, constant D) and direct quadrature (D(x) case), reference/periodic.py.
#[test]
fn drift_matches_mpmath() {
    let v = values();
    for case in v["drift"].as_array().unwrap() {
        let (a, tilt, l) = (f(case, "A"), f(case, "F"), f(case, "L"));
        let t = run(&washboard(a, tilt, l), &diffusion(case), l);
        let want = f(case, "v");
        println!(
            "drift A={a} F={tilt} L={l} D={}: {:.15e} vs {want:.15e}",
            case["D"], t.drift
        );
        assert!(rel(t.drift, want) < QUAD_REL, "{} {want}", t.drift);
        assert!(t.tilt == tilt || rel(t.tilt, tilt) < 1e-13);
    }
}

// Linear response (Risken ch. 11; the F → 0 limit of the Stratonovich formula): v/F → D_LJ. For
// a symmetric V, v is odd in F, so v/F − D_LJ = O(F²): at F = 1e-4 that is ~1e-8 relative times
// a coefficient of order (L/kT)² ⟨…⟩; 1e-6 bounds it for V0 ≤ 4 (measured below 1e-8).
#[test]
fn drift_linear_response_tends_to_lifson_jackson() {
    for v0 in [1.0, 4.0] {
        let t = run(&washboard(v0, 1e-4, 1.0), &Diffusion::Constant(1.0), 1.0);
        let r = t.drift / t.drift_linear - 1.0;
        println!("V0 = {v0}: v/(D_LJ F) - 1 = {r:.2e}");
        assert!(r.abs() < 1e-6);
    }
}

// Reimann et al., Phys. Rev. Lett. 87, 010602 (2001), D_eff with I±; mpmath by Fourier–Bessel
// series of I±(x) and the trapezoid rule in x (reference/periodic.py). Limits: F → 0 gives
// Lifson–Jackson (same paper), F → ∞ gives D (closed form, the landscape no longer matters:
// D_eff − D = O((A k/F)²), A k/F = 0.0126 at F = 1000; measured 1.5 (A k/F)², 2 (A k/F)² allowed).
#[test]
fn tilted_effective_diffusion_matches_mpmath_and_limits() {
    let v = values();
    for case in v["reimann"].as_array().unwrap() {
        let (a, tilt, l) = (f(case, "A"), f(case, "F"), f(case, "L"));
        let t = run(&washboard(a, tilt, l), &diffusion(case), l);
        let want = f(case, "D_eff");
        let got = t.effective_diffusion.unwrap();
        println!("Reimann A={a} F={tilt}: {got:.15e} vs {want:.15e}");
        assert!(rel(got, want) < QUAD_REL);
    }
    let t = run(&washboard(2.0, 1e-6, 1.0), &Diffusion::Constant(1.0), 1.0);
    // O(F²) = 1e-12 away from Lifson–Jackson
    assert!(
        rel(
            t.effective_diffusion.unwrap(),
            t.effective_diffusion_untilted
        ) < 1e-9
    );
    let t = run(&washboard(2.0, 1000.0, 1.0), &Diffusion::Constant(1.0), 1.0);
    println!(
        "F = 1000: D_eff/D - 1 = {:.2e}",
        t.effective_diffusion.unwrap() - 1.0
    );
    let akf = 2.0 * 2.0 * std::f64::consts::PI / 1000.0;
    assert!(rel(t.effective_diffusion.unwrap(), 1.0) < 2.0 * akf * akf);
}

// Exact overdamped hops (PHYSICS.md §6 with both neighbours absorbing) against mpmath (another
// arrangement of the same integrals, Fourier–Bessel antiderivatives; reference/periodic.py).
#[test]
fn hopping_matches_mpmath() {
    let v = values();
    for case in v["hopping"].as_array().unwrap() {
        let (a, tilt, l) = (f(case, "A"), f(case, "F"), f(case, "L"));
        let t = run(&washboard(a, tilt, l), &diffusion(case), l);
        let h = t.hopping.unwrap();
        println!(
            "hop A={a} F={tilt}: T {:.15e} vs {:.15e}, k+ {:.15e} vs {:.15e}",
            h.mfpt,
            f(case, "T"),
            h.forward,
            f(case, "k_plus")
        );
        // x_a from Brent's method on U' agrees with asin(F/(Ak))/k to ~1e-15; T is flat there
        assert!((h.reactant - f(case, "x_a")).abs() < 1e-12);
        assert!(h.one_well_per_period);
        assert!(rel(h.mfpt, f(case, "T")) < QUAD_REL);
        assert!(rel(h.splitting_forward, f(case, "pi_plus")) < QUAD_REL);
        assert!(rel(h.forward, f(case, "k_plus")) < QUAD_REL);
        assert!(rel(h.backward, f(case, "k_minus")) < QUAD_REL);
    }
}

// Identities, no outside source: k_+/k_− = e^{FL} (one well per period: the two halves of the
// splitting integral are translates, module doc), k_+ = k_− at F = 0 (mirror symmetry of the
// cosine), and v = L (k_+ − k_−) (renewal–reward: each hop starts afresh at a minimum, moves ±L
// with probability π_±, and takes mean time T). Barriers up to 100 kT; tolerances are the
// quadrature's (1e-9), as every side is an independent set of integrals.
#[test]
fn hopping_identities_hold_up_to_100_kt() {
    for (a, tilt, d) in [
        (3.0, 1.0, 1.0),
        (2.0, 0.0, 0.5),
        (10.0, 2.5, 1.0),
        (50.0, 3.0, 0.2),
    ] {
        let t = run(&washboard(a, tilt, 1.0), &Diffusion::Constant(d), 1.0);
        let h = t.hopping.as_ref().unwrap();
        let ratio = h.forward / h.backward;
        let renewal = h.forward - h.backward;
        println!(
            "A={a} F={tilt}: Eb+ {:.3} k+ {:.6e} k- {:.6e} ratio/e^FL-1 {:.1e} v/(k+-k-)-1 {:.1e}",
            h.barrier_forward,
            h.forward,
            h.backward,
            ratio / tilt.exp() - 1.0,
            t.drift / renewal - 1.0
        );
        assert!(h.forward.is_finite() && h.forward > 0.0);
        assert!(rel(ratio, tilt.exp()) < 1e-10);
        if tilt == 0.0 {
            assert!(rel(h.forward, h.backward) < 1e-12);
            assert_eq!(t.drift, 0.0);
        } else {
            assert!(rel(t.drift, renewal) < QUAD_REL);
        }
    }
}

// High barrier: the exact rates tend to the per-barrier Smoluchowski rates (Kramers 1940;
// PHYSICS.md §2) with corrections of order kT/ΔU (HTB 1990); allowance kT/ΔU (measured about
// half of it: 0.974 at 19 kT, 0.995 at 99 kT). Kramers with γ ≫ ω_b is the Smoluchowski rate
// within 2 (ω_b/γ)² ≤ 4e-5 here (λ₊ = (ω_b²/γ)(1 − ω_b²/γ² + …), D = kT/(mγ): the first
// correction is −(ω_b/γ)², measured to 3 digits).
#[test]
fn hopping_tends_to_per_barrier_kramers_rates() {
    for (a, tilt) in [(10.0, 2.0), (25.0, 5.0), (50.0, 3.0)] {
        let (m, d) = (1.0, 1e-4);
        let gamma = 1.0 / (m * d);
        let pot = washboard(a, tilt, 1.0);
        let t = analyse(
            &pot,
            &Diffusion::Constant(d),
            0.0,
            1.0,
            0.0,
            Some(m),
            Some(gamma),
        )
        .unwrap();
        let h = t.hopping.unwrap();
        let (rp, rm) = (
            h.forward / h.forward_smoluchowski,
            h.backward / h.backward_smoluchowski,
        );
        println!(
            "A={a} F={tilt}: dU+ {:.3} dU- {:.3} exact/Smol {rp:.5} {rm:.5}",
            h.barrier_forward, h.barrier_backward
        );
        assert!((rp - 1.0).abs() < 1.0 / h.barrier_forward);
        assert!((rm - 1.0).abs() < 1.0 / h.barrier_backward);
        let kk = h.forward_kramers.unwrap() / h.forward_smoluchowski;
        let omega_b = (pot.d2u(h.forward_barrier_top).abs() / m).sqrt();
        let bound = 2.0 * (omega_b / gamma).powi(2);
        println!(
            "  Kramers/Smol - 1 = {:.2e}, (omega_b/gamma)^2 = {bound:.2e}",
            kk - 1.0
        );
        assert!((kk - 1.0).abs() < bound);
    }
}

// The wrapper: U continuous across period boundaries and U', U'' against central differences
// (common practice, no source: step 1e-5 → truncation ~1e-10, rounding ~1e-10 relative to the
// O(10–100) values), for a washboard, a formula and a spline table; tilt read off the profile.
#[test]
fn wrapper_is_continuous_and_differentiable() {
    let fam = washboard(2.0, 0.7, 1.5);
    let form = FormulaPotential::new(
        formula("2*cos(2*pi*x) + sin(4*pi*x) - 0.3*x"),
        1.0,
        (0.0, 1.0),
    );
    let table = table_of(&form);
    check_wrapper(Periodic::new(fam, 0.2, 1.5).unwrap(), 0.7);
    check_wrapper(Periodic::new(form, 0.0, 1.0).unwrap(), 0.3);
    check_wrapper(Periodic::new(table, 0.0, 1.0).unwrap(), 0.3);
    // the washboard's own closed form on the whole line (rounding of −F n L only)
    let w = Periodic::new(fam, 0.2, 1.5).unwrap();
    for &x in &[-4.0, -1.3, 0.0, 2.2, 4.4] {
        assert!((w.u(x) - fam.u(x)).abs() < 1e-13);
    }
}

fn check_wrapper<P: Potential>(w: Periodic<P>, tilt: f64) {
    let (x0, l) = (w.origin(), w.period());
    // the table's tilt is read from spline end values (exact at the knots)
    assert!((w.tilt() - tilt).abs() < 1e-12, "{}", w.tilt());
    let eps = 1e-12;
    for k in -3..4 {
        let b = x0 + f64::from(k) * l;
        let jump = w.u(b + eps) - w.u(b - eps);
        // 2 ε |U'| ≲ 1e-10 plus rounding of O(10) values
        assert!(jump.abs() < 1e-9, "jump {jump} at {b}");
    }
    let h = 1e-5;
    // off the table's knots (multiples of 0.005), where the spline's third derivative jumps
    for &x in &[-2.7713, -0.1037, 0.3321, 1.9127, 3.0551] {
        let d1 = (w.u(x + h) - w.u(x - h)) / (2.0 * h);
        let d2 = (w.du(x + h) - w.du(x - h)) / (2.0 * h);
        assert!(
            (w.du(x) - d1).abs() < 1e-6 * (1.0 + d1.abs()),
            "{x} {} {d1}",
            w.du(x)
        );
        assert!(
            (w.d2u(x) - d2).abs() < 1e-6 * (1.0 + d2.abs()),
            "{x} {} {d2}",
            w.d2u(x)
        );
        // V = U + F (x − x0) repeats
        assert!((w.untilted(x) - w.untilted(x + l)).abs() < 1e-12);
    }
}

// A profile whose force does not repeat is refused, with the key to look at.
#[test]
fn non_periodic_profile_is_an_error() {
    let p = FormulaPotential::new(formula("x^2 + cos(2*pi*x)"), 1.0, (-1.0, 2.0));
    let e = analyse(&p, &Diffusion::Constant(1.0), 0.0, 1.0, 0.0, None, None).unwrap_err();
    assert!(
        matches!(e, PeriodicError::Wrap(WrapError::NotPeriodic { .. })),
        "{e}"
    );
    assert_eq!(e.key(), "potential");
    let w = washboard(1.0, 0.5, 1.0);
    let e = analyse(&w, &Diffusion::Constant(-1.0), 0.0, 1.0, 0.0, None, None).unwrap_err();
    assert_eq!(e.key(), "particle.diffusion");
    let d = Diffusion::Formula(formula("sin(2*pi*x)"));
    let e = analyse(&w, &d, 0.0, 1.0, 0.0, None, None).unwrap_err();
    assert_eq!(e.key(), "particle.diffusion_expr");
}

// Past the critical tilt F_c = 2πA/L there are no wells: drift and D_eff exist, hopping does not.
#[test]
fn running_state_has_no_hops() {
    let t = run(&washboard(1.0, 8.0, 1.0), &Diffusion::Constant(1.0), 1.0);
    assert!(t.hopping.is_none());
    assert!(!t.warnings.is_empty());
    // between the free value D F = 8 and 0 (common practice, no source: the landscape slows it)
    assert!(t.drift > 0.0 && t.drift < 8.0);
}

// Two wells per period: the neighbours are the other well, not x_a ± L; the rates still obey
// k_+/k_− = π_+/(1 − π_+) (their definition), and the well-to-well ratio is no longer e^{FL}.
#[test]
fn two_wells_per_period_are_flagged() {
    let p = FormulaPotential::new(
        formula("3*cos(4*pi*x) + cos(2*pi*x) - 0.5*x"),
        1.0,
        (-3.0, 3.0),
    );
    let t = analyse(&p, &Diffusion::Constant(1.0), 0.0, 1.0, 0.25, None, None).unwrap();
    let h = t.hopping.unwrap();
    println!(
        "two wells: x_a {} x_+ {} x_- {}",
        h.reactant, h.forward_minimum, h.backward_minimum
    );
    assert!(!h.one_well_per_period);
    assert!(h.forward_minimum - h.reactant < 0.9 && h.reactant - h.backward_minimum < 0.9);
    let s = h.splitting_forward;
    // definition of the rates: rounding only
    assert!(rel(h.forward / h.backward, s / (1.0 - s)) < 1e-12);
}

// A spline table of one period of the washboard (201 rows) against the mpmath drift and D_eff
// of the closed form: the not-a-knot spline's error h⁴ U''''/384 with h = 0.005, U'''' = A (2π)⁴
// is ~5e-9 in U, so 1e-7 relative in the integrals.
#[test]
fn table_profile_reproduces_the_washboard() {
    let v = values();
    let case = &v["drift"][0];
    let r = &v["reimann"][0];
    let (a, tilt) = (f(case, "A"), f(case, "F"));
    let w = washboard(a, tilt, 1.0);
    let table = table_of(&w);
    let t = run(&table, &Diffusion::Constant(1.0), 1.0);
    println!(
        "table: drift rel {:.1e}, D_eff rel {:.1e}",
        t.drift / f(case, "v") - 1.0,
        t.effective_diffusion.unwrap() / f(r, "D_eff") - 1.0
    );
    assert!(rel(t.drift, f(case, "v")) < 1e-7);
    assert!(rel(t.effective_diffusion.unwrap(), f(r, "D_eff")) < 1e-7);
}
