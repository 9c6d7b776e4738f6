//! The verdict of `compare` agrees with its own table: it never names as agreeing a theory the
//! table marks as not holding, and a row with nothing to compare says so in every column
//! (common practice, no source).

mod common;
use common::{example, stdout as run};

/// The method keys the verdict lists (after "…: " up to the next ";").
fn listed(verdict: &str) -> Vec<String> {
    verdict
        .split(';')
        .filter_map(|part| part.split_once(": ").map(|(_, l)| l))
        .flat_map(|l| l.split(','))
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .collect()
}

// γ/ω_b ≈ 2 in the reduced double well: both TST rates lie inside the interval of 100 simulated
// escapes (seed 3), but TST is an upper bound that the table marks as not holding.
const GAMMA_2: [&str; 8] = [
    "--set",
    "particle.friction=2",
    "--set",
    "simulation.trajectories=100",
    "--set",
    "simulation.seed=3",
    "--quiet",
    "--threads=2",
];

#[test]
fn the_verdict_names_only_theories_that_hold() {
    let f = example("double_well_reduced.toml");
    let mut args = vec!["compare", f.to_str().unwrap(), "--json"];
    args.extend_from_slice(&GAMMA_2);
    let v: serde_json::Value = serde_json::from_str(&run(&args)).unwrap();
    let verdict = v["verdict"].as_str().unwrap();
    let rows = v["comparison"].as_array().unwrap();
    // the case this test is about: a theory inside the interval that does not hold
    assert!(
        rows.iter()
            .any(|r| r["agrees"] == true && r["valid"] == false),
        "no such row any more: {rows:?}"
    );
    let names = listed(verdict);
    assert!(!names.is_empty(), "{verdict}");
    for n in &names {
        let row = rows
            .iter()
            .find(|r| r["method"] == n.as_str())
            .unwrap_or_else(|| panic!("{n} is not a method: {verdict}"));
        assert_eq!(
            row["valid"], true,
            "{n} does not hold but is listed: {verdict}"
        );
    }
    // the text says the same
    let mut args = vec!["compare", f.to_str().unwrap()];
    args.extend_from_slice(&GAMMA_2);
    let text = run(&args);
    let line = text
        .lines()
        .find(|l| l.starts_with("verdict: "))
        .expect("a verdict line");
    assert_eq!(listed(line.trim_start_matches("verdict: ")), names);
}

/// The cells of the comparison table's first line whose first cell starts with `label`.
fn row_cells<'a>(text: &'a str, label: &str) -> Vec<&'a str> {
    let line = text
        .lines()
        .skip_while(|l| !l.contains("set against"))
        .find(|l| {
            l.starts_with('│')
                && l.trim_start_matches('│')
                    .split('┆')
                    .next()
                    .is_some_and(|c| c.trim().starts_with(label))
        })
        .unwrap_or_else(|| panic!("no row {label}"));
    line.trim_matches('│').split('┆').map(str::trim).collect()
}

// An overdamped colloid known by D only: the formulas that need a mass have no rate, and the
// well-to-well rate has no counted transitions to be set against.
#[test]
fn a_row_with_nothing_to_compare_says_so_in_every_column() {
    let f = example("colloid_trap_um.toml");
    let text = run(&["compare", f.to_str().unwrap(), "--quiet", "--threads=2"]);
    for label in [
        "Kramers",
        "energy diffusion",
        "Mel'nikov-Meshkov",
        "well-to-well",
    ] {
        let cells = row_cells(&text, label);
        assert_eq!(cells.len(), 8, "{label}: {cells:?}");
        for (i, c) in cells.iter().enumerate() {
            assert!(!c.is_empty(), "{label}: column {i} blank: {cells:?}");
        }
        // ratio, its interval, "in sim. interval" and "within accuracy" have nothing to say
        for c in [cells[3], cells[4], cells[6], cells[7]] {
            assert!(c.starts_with("n/a"), "{label}: {c:?} in {cells:?}");
        }
    }
    // the verdict names no row without a rate
    let line = text.lines().find(|l| l.starts_with("verdict: ")).unwrap();
    for n in listed(line.trim_start_matches("verdict: ")) {
        assert!(
            ["smoluchowski", "mfpt"].contains(&n.as_str()),
            "{n} listed: {line}"
        );
    }
    // `rate` lists as trusted exactly the rows its table marks "yes"
    let rate = run(&["rate", f.to_str().unwrap()]);
    let trust = rate
        .lines()
        .find(|l| l.starts_with("trust here: "))
        .expect("a trust line");
    assert_eq!(trust, "trust here: smoluchowski, mfpt");
}
