//! A table's sigma_D column carried into the rates (src/uncertainty.rs, "Diffusion noise"), on
//! invented tabulated double wells with a D column written to a temporary folder.

use escapade::scenario::Model;
use escapade::uncertainty::{UncertaintyOptions, UncertaintyReport, propagate};
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};

static COUNTER: AtomicUsize = AtomicUsize::new(0);

/// Writes `csv` as the profile of a table scenario (no [particle]: D comes from the table).
fn model(csv: &str) -> Result<Model, String> {
    let dir: PathBuf = std::env::temp_dir().join(format!(
        "escapade-dnoise-{}-{}",
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::write(dir.join("profile.csv"), csv).unwrap();
    let text = "[potential]\ntable = \"profile.csv\"\n[states]\nstart = -1.0\n";
    let m = Model::from_text(text, "scenario.toml", &dir, &[]).map_err(|e| e.to_string());
    std::fs::remove_dir_all(&dir).ok();
    m
}

/// Invented quartic double well 5 (x² − 1)² kT on [−2, 2], 201 rows, D(x) = 1 + 0.2 x, with
/// optional σ_U and a relative σ_D.
fn csv(sigma_u: Option<f64>, rel_sigma_d: Option<f64>) -> String {
    let mut out = String::from("x,U");
    if sigma_u.is_some() {
        out.push_str(",sigma_U");
    }
    out.push_str(",D");
    if rel_sigma_d.is_some() {
        out.push_str(",sigma_D");
    }
    out.push('\n');
    for i in 0..=200 {
        let x = -2.0 + f64::from(i) * 0.02;
        let d = 1.0 + 0.2 * x;
        out.push_str(&format!("{x:.17e},{:.17e}", 5.0 * (x * x - 1.0).powi(2)));
        if let Some(s) = sigma_u {
            out.push_str(&format!(",{s}"));
        }
        out.push_str(&format!(",{d:.17e}"));
        if let Some(r) = rel_sigma_d {
            out.push_str(&format!(",{:.17e}", r * d));
        }
        out.push('\n');
    }
    out
}

fn run(m: &Model, ell: f64) -> UncertaintyReport {
    let opts = UncertaintyOptions {
        draws: 400,
        correlation_length: Some(ell),
        seed: 5,
    };
    propagate(&m.system, &opts).unwrap().unwrap()
}

// D perturbed by one common factor (ℓ far beyond the table: every row gets the same ζ, see the
// module doc) scales the whole D(x), so ln(1/MFPT) and ln k_Smoluchowski move by exactly s ζ with
// ζ ~ N(0, 1) (MFPT ∝ 1/D for a uniformly scaled D: Szabo, Schulten & Schulten 1980, the integral
// form). Their variance over 400 draws is s² within 4 standard errors s²·sqrt(2/399) (the
// sample variance of a normal; common practice, no source). With σ_U absent the profile part is 0.
#[test]
fn a_common_d_factor_moves_the_rates_by_exactly_its_spread() {
    let s = 0.2;
    let m = model(&csv(None, Some(s))).unwrap();
    let r = run(&m, 1e9);
    let noise = r
        .diffusion_noise
        .as_ref()
        .expect("a sigma_D column is reported");
    for key in ["mfpt", "smoluchowski"] {
        let share = noise.rates.iter().find(|x| x.key == key).unwrap();
        let v = share.var_ln_k_diffusion;
        let se = s * s * (2.0f64 / 399.0).sqrt();
        assert!((v - s * s).abs() < 4.0 * se, "{key}: var {v} vs {}", s * s);
        assert_eq!(share.var_ln_k_profile, 0.0);
        assert_eq!(share.dominant, "diffusion");
        // the interval of the both-perturbed draws (here D alone): about ±1.96 s in ln k
        let i = r.rates.iter().find(|i| i.key == key).unwrap();
        let half = 0.5 * (i.ci95[1] / i.ci95[0]).ln();
        assert!(
            (half / (1.96 * s) - 1.0).abs() < 0.2,
            "{key}: half width {half}"
        );
    }
    // E_b does not depend on D: every draw has the unperturbed barrier (σ_U absent)
    assert!((r.barrier.ci95[1] - r.barrier.ci95[0]).abs() < 1e-9);
}

// Independent sources add: var(ln k) of the draws perturbing both is the sum of the U-only and
// D-only variances, within the sampling error of three variances of 400 draws (each relative
// standard error sqrt(2/399) = 7%; 4 of them on the sum, common practice, no source). And a
// sigma_D column of zeros changes nothing: the report equals the one without the column.
#[test]
fn sources_add_and_a_zero_sigma_d_changes_nothing() {
    let both = run(&model(&csv(Some(0.15), Some(0.1))).unwrap(), 0.05);
    let noise = both.diffusion_noise.as_ref().unwrap();
    let total = both
        .decompositions
        .iter()
        .find(|d| d.key == "mfpt")
        .unwrap()
        .var_ln_k;
    let mfpt = noise.rates.iter().find(|x| x.key == "mfpt").unwrap();
    let sum = mfpt.var_ln_k_profile + mfpt.var_ln_k_diffusion;
    assert!(
        (total / sum - 1.0).abs() < 4.0 * (2.0f64 / 399.0).sqrt(),
        "both {total} vs U {} + D {}",
        mfpt.var_ln_k_profile,
        mfpt.var_ln_k_diffusion
    );
    let plain = run(&model(&csv(Some(0.15), None)).unwrap(), 0.05);
    let zero = run(&model(&csv(Some(0.15), Some(0.0))).unwrap(), 0.05);
    assert!(zero.diffusion_noise.is_none());
    assert_eq!(
        serde_json::to_string(&zero).unwrap(),
        serde_json::to_string(&plain).unwrap()
    );
    // and the σ_U draws are the same with σ_D present (own streams): E_b's interval is equal
    assert_eq!(both.barrier.ci95, plain.barrier.ci95);
}

#[test]
fn bad_sigma_d_columns_are_refused_with_their_line() {
    let e = model("x,U,sigma_D\n0,1,0.1\n1,0,0.1\n2,1,0.1\n3,4,0.1\n").unwrap_err();
    assert!(
        e.contains("line 1") && e.contains("needs a D column"),
        "{e}"
    );
    let e = model("x,U,D,sigma_D\n0,1,1,0.1\n1,0,1,-0.1\n2,1,1,0.1\n3,4,1,0.1\n").unwrap_err();
    assert!(
        e.contains("line 3") && e.contains("sigma_D is negative"),
        "{e}"
    );
}
