//! The scan table fits an ordinary terminal: by default the scanned value, the rates that hold at
//! some point (shown where they hold) and the simulated rate with its interval in one cell;
//! `--all-columns` shows every rate. Headings are short, carry units and wrap only at spaces.
//! Common practice, no source.

use escapade::theory::catalogue::CATALOGUE;
use std::path::Path;

mod common;
use common::{example, stdout as run};

/// The first table of `text`: headings and rows (the pieces of a wrapped cell joined by spaces),
/// and its width in characters.
fn first_table(text: &str) -> (Vec<String>, Vec<Vec<String>>, usize) {
    let lines: Vec<&str> = text
        .lines()
        .skip_while(|l| !l.starts_with('┌'))
        .take_while(|l| !l.starts_with('└'))
        .collect();
    let width = lines.iter().map(|l| l.chars().count()).max().unwrap();
    let cells = |l: &str| -> Vec<String> {
        l.trim_matches('│')
            .split('┆')
            .map(|c| c.trim().to_string())
            .collect()
    };
    let sep = lines.iter().position(|l| l.starts_with('╞')).unwrap();
    let mut head: Vec<String> = Vec::new();
    for l in &lines[1..sep] {
        let c = cells(l);
        head.resize(c.len(), String::new());
        for (h, piece) in head.iter_mut().zip(c) {
            if !piece.is_empty() {
                if !h.is_empty() {
                    h.push(' ');
                }
                h.push_str(&piece);
            }
        }
    }
    // a row whose cells wrap continues on lines with an empty first cell
    let mut rows: Vec<Vec<String>> = Vec::new();
    for l in &lines[sep + 1..] {
        let c = cells(l);
        match rows.last_mut() {
            Some(row) if c[0].is_empty() => {
                for (cell, piece) in row.iter_mut().zip(c) {
                    if !piece.is_empty() {
                        cell.push(' ');
                        cell.push_str(&piece);
                    }
                }
            }
            _ => rows.push(c),
        }
    }
    (head, rows, width)
}

/// Which rate keys hold at `set` (from `rate --json`).
fn holding(file: &Path, set: &str) -> Vec<String> {
    let v: serde_json::Value = serde_json::from_str(&run(&[
        "rate",
        file.to_str().unwrap(),
        "--json",
        "--set",
        set,
    ]))
    .unwrap();
    v["regime"]["trusted"]
        .as_array()
        .unwrap()
        .iter()
        .map(|k| k.as_str().unwrap().to_string())
        .collect()
}

/// The heading of each rate column (reduced units: rates per τ).
/// (JSON key, scan-table heading in reduced units) of every rate formula, from the catalogue.
fn headings() -> Vec<(&'static str, String)> {
    CATALOGUE
        .iter()
        .map(|f| (f.key.as_str(), format!("{} (1/τ)", f.heading)))
        .collect()
}

fn is_number(s: &str) -> bool {
    s.parse::<f64>().is_ok()
}

// The friction scan of the README, from energy diffusion (δ < 0.02 at γ = 0.002) to overdamped, 9
// points simulated with few trajectories.
#[test]
fn the_friction_scan_table_fits_100_columns() {
    let f = example("double_well_reduced.toml");
    let args = [
        "scan",
        f.to_str().unwrap(),
        "--vary",
        "particle.friction",
        "--from",
        "0.002",
        "--to",
        "300",
        "--points",
        "9",
        "--log",
        "--simulate",
        "--set",
        "simulation.trajectories=20",
        "--quiet",
        "--threads=2",
    ];
    let text = run(&args);
    let (head, rows, width) = first_table(&text);
    assert!(width <= 100, "{width} columns:\n{text}");
    // which rates hold where, from `rate`
    let values: Vec<String> = rows.iter().map(|r| r[0].clone()).collect();
    assert_eq!(values.len(), 9, "one row per point:\n{text}");
    let holds: Vec<Vec<String>> = values
        .iter()
        .map(|v| holding(&f, &format!("particle.friction={v}")))
        .collect();
    let mut want = vec!["γ (1/τ)".to_string()];
    let shown: Vec<&str> = headings()
        .into_iter()
        .filter(|(k, _)| holds.iter().any(|h| h.iter().any(|x| x == k)))
        .map(|(k, h)| {
            want.push(h);
            k
        })
        .collect();
    want.push("sim. (1/τ)".into());
    assert_eq!(head, want, "\n{text}");
    assert!(shown.contains(&"energy_diffusion") && shown.contains(&"mfpt"));
    for (row, h) in rows.iter().zip(&holds) {
        for (k, cell) in shown.iter().zip(&row[1..]) {
            if h.iter().any(|x| x == k) {
                assert!(is_number(cell), "{k} holds at {}: {cell:?}", row[0]);
            } else {
                assert_eq!(cell, "—", "{k} does not hold at {}", row[0]);
            }
        }
        // one cell: "1.23e-4 −11/+12%", "1.23e-4 ±8%" or "1.23e-4 [1.1e-4, 1.4e-4]"
        let sim = row.last().unwrap();
        let (v, iv) = sim.split_once(' ').unwrap_or_else(|| panic!("{sim:?}"));
        assert!(is_number(v), "{sim:?}");
        let ok = if let Some(b) = iv.strip_prefix('[') {
            let (lo, hi) = b.trim_end_matches(']').split_once(", ").unwrap();
            is_number(lo) && is_number(hi)
        } else if let Some(p) = iv.strip_prefix('±') {
            is_number(p.trim_end_matches('%'))
        } else {
            let (d, u) = iv
                .strip_prefix('−')
                .and_then(|x| x.trim_end_matches('%').split_once("/+"))
                .unwrap_or_else(|| panic!("{sim:?}"));
            is_number(d) && is_number(u)
        };
        assert!(ok, "{sim:?}");
    }
    // every rate, and the regime, with --all-columns
    let mut all: Vec<&str> = args
        .iter()
        .copied()
        .filter(|a| *a != "--simulate")
        .collect();
    all.push("--all-columns");
    let text = run(&all);
    let (head, _, _) = first_table(&text);
    for (_, h) in headings().iter().filter(|(k, _)| *k != "grote_hynes") {
        assert!(head.iter().any(|x| x == h), "{h} missing: {head:?}");
    }
    assert!(head.iter().any(|x| x == "regime"));
}

// A temperature scan in physical units: short headings with units, no word split.
#[test]
fn a_temperature_scan_table_fits_100_columns() {
    let f = example("isomerization_kjmol.toml");
    let text = run(&[
        "scan",
        f.to_str().unwrap(),
        "--vary",
        "units.temperature",
        "--from",
        "250",
        "--to",
        "400",
        "--points",
        "7",
    ]);
    let (head, rows, width) = first_table(&text);
    assert!(width <= 100, "{width} columns:\n{text}");
    assert_eq!(head[0], "T (K)");
    assert_eq!(rows.len(), 7);
    for h in &head[1..] {
        assert!(
            headings()
                .iter()
                .any(|(_, x)| *x == h.replace("1/ps", "1/τ")),
            "{h}"
        );
    }
}
