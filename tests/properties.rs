//! Property tests (proptest, fixed case counts): the rates are positive and finite over random
//! valid scenarios; the exact MFPT grows with the barrier and shrinks with D; Kramers tends to TST
//! as γ → 0 and to Smoluchowski as γ → ∞; merging shard records does not depend on their order.
//! These are identities of the formulas (common practice, no source).

use escapade::scenario::{Model, Override};
use escapade::simulate::{Plan, RunOptions, records, run_ensemble};
use escapade::theory;
use proptest::prelude::*;
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

fn dw(eb: f64, a: f64, m: f64, g: f64) -> theory::TheoryReport {
    let text = format!(
        "[particle]\nmass = {m:?}\nfriction = {g:?}\n[potential]\nfamily = \"double-well\"\nbarrier = {eb:?}\nhalf_width = {a:?}\n[states]\nstart = {:?}\n",
        -a
    );
    let m = Model::from_text(&text, "p", Path::new("."), &[]).unwrap();
    theory::analyse(&m.system).unwrap()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn rates_are_positive_and_finite(
        eb in 0.2f64..150.0, a in 0.1f64..5.0, m in 0.01f64..100.0, g in 1e-3f64..1e3,
    ) {
        let t = dw(eb, a, m, g);
        for k in [t.rates.tst, t.rates.tst_exact, t.rates.kramers, t.rates.smoluchowski,
                  t.rates.energy_diffusion, t.rates.turnover, t.rates.pgh, t.rates.mfpt] {
            let k = k.unwrap();
            prop_assert!(k.is_finite() && k > 0.0, "{k}");
        }
        // PGH = Υ k_Kramers with 0 < Υ < 1 (a probability of not being depleted; PGH 1989)
        prop_assert!(t.rates.pgh.unwrap() <= t.rates.kramers.unwrap() * (1.0 + 1e-12));
        prop_assert!(t.mfpt.time.is_finite() && t.mfpt.time > 0.0);
    }

    #[test]
    fn mfpt_grows_with_the_barrier_and_shrinks_with_d(
        eb in 0.5f64..60.0, step in 0.1f64..5.0, g in 0.1f64..100.0,
    ) {
        let lo = dw(eb, 1.0, 1.0, g).mfpt.time;
        let hi = dw(eb + step, 1.0, 1.0, g).mfpt.time;
        prop_assert!(hi > lo);
        // D = kT/(mγ): a larger friction is a smaller D and a longer MFPT, in proportion
        let slow = dw(eb, 1.0, 1.0, 2.0 * g).mfpt.time;
        prop_assert!((slow / lo - 2.0).abs() < 1e-9);
    }

    #[test]
    fn kramers_limits(eb in 3.0f64..60.0, a in 0.2f64..3.0) {
        let weak = dw(eb, a, 1.0, 1e-9);
        prop_assert!((weak.rates.kramers.unwrap() / weak.rates.tst.unwrap() - 1.0).abs() < 1e-6);
        let strong = dw(eb, a, 1.0, 1e9);
        prop_assert!(
            (strong.rates.kramers.unwrap() / strong.rates.smoluchowski.unwrap() - 1.0).abs() < 1e-6
        );
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(6))]

    #[test]
    fn merging_shards_is_order_independent(perm in Just(vec![0usize, 1, 2]).prop_shuffle()) {
        let text = "[particle]\nmass = 1.0\nfriction = 3.0\n[potential]\nfamily = \"double-well\"\nbarrier = 2.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n[simulation]\ntrajectories = 90\nseed = 4\n";
        let m = Model::from_text(text, "p", Path::new("."), &[Override::parse("simulation.seed=4").unwrap()]).unwrap();
        let t = theory::analyse(&m.system).unwrap();
        let plan = plan_of(&m, &t).unwrap();
        let dir = std::env::temp_dir().join(format!("escapade-prop-{}-{:?}", std::process::id(), perm));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        let never = AtomicBool::new(false);
        let mut files = Vec::new();
        for k in 1..=3u64 {
            let f = dir.join(format!("p{k}.csv"));
            let opts = RunOptions { shard: Some((k, 3)), records: Some(f.clone()), threads: 1, ..RunOptions::default() };
            run_ensemble(&plan, &opts, &never, |_, _| {}).unwrap();
            files.push(f);
        }
        let ordered: Vec<&Path> = perm.iter().map(|&i| files[i].as_path()).collect();
        let base: Vec<&Path> = files.iter().map(|f| f.as_path()).collect();
        let a = records::merge(&ordered).unwrap().outcomes;
        let b = records::merge(&base).unwrap().outcomes;
        let _ = std::fs::remove_dir_all(&dir);
        prop_assert_eq!(a, b);
    }
}
