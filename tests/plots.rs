//! Pictures read as a person reads them: scans over any range draw on a linear axis unless `--log`
//! (and never hang), tick labels are rounded, every curve carries markers that show where its
//! formula holds, the legend sits outside the data, and the survey picture has a title and
//! labels that do not overlap. Checks read the SVG's own markup (`svg.rs` module doc): markers
//! are `<g class="marker …" data-series=… transform="translate(x,y)">`, the legend is
//! `<g class="legend">` with a `<rect class="legend-box">`, the plotting area is the rectangle of
//! the clip path `plot-area`. All of this is common practice, no source.

use assert_cmd::Command;
use std::path::{Path, PathBuf};
use std::time::Duration;

mod common;
use common::example;

fn tmp(name: &str) -> PathBuf {
    std::env::temp_dir().join(format!("escapade-plots-{}-{name}", std::process::id()))
}

/// A tilted washboard written as a formula with a constant force f (reduced units, 8 kT), in a
/// file of its own for each test (they run in parallel).
fn washboard(test: &str) -> PathBuf {
    let p = tmp(&format!("washboard-{test}.toml"));
    std::fs::write(
        &p,
        "title = \"washboard with a constant force\"\n[particle]\ndiffusion = 1.0\n[potential]\nexpr = \"-A*cos(2*pi*x) - f*x\"\ndomain = [-0.5, 0.5]\nperiodic = 1.0\n[potential.constants]\nA = 4.0\nf = 0.5\n[states]\nstart = 0.0\n",
    )
    .unwrap();
    p
}

/// Runs the binary (at most 60 s: a picture must never take minutes) and returns the SVG written
/// to `svg`.
fn picture(args: &[&str], svg: &Path) -> String {
    let mut all: Vec<&str> = args.to_vec();
    all.extend_from_slice(&["--plot", svg.to_str().unwrap(), "--quiet"]);
    let out = Command::cargo_bin("escapade")
        .unwrap()
        .args(&all)
        .timeout(Duration::from_secs(60))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{all:?}: exit {:?}, {}",
        out.status.code(),
        String::from_utf8_lossy(&out.stderr)
    );
    let s = std::fs::read_to_string(svg).unwrap();
    let _ = std::fs::remove_file(svg);
    s
}

fn scan_picture(file: &Path, key: &str, from: &str, to: &str, n: &str, more: &[&str]) -> String {
    let svg = tmp(&format!("{key}-{from}-{to}-{}.svg", more.len()));
    let mut args = vec![
        "scan",
        file.to_str().unwrap(),
        "--vary",
        key,
        "--from",
        from,
        "--to",
        to,
        "--points",
        n,
    ];
    args.extend_from_slice(more);
    picture(&args, &svg)
}

/// A marker: its series, its classes and its centre in pixels.
#[derive(Debug)]
struct Marker {
    series: String,
    class: String,
    x: f64,
    y: f64,
    shape: String,
}

fn translate(t: &str) -> (f64, f64) {
    let inner = t
        .trim()
        .strip_prefix("translate(")
        .and_then(|s| s.strip_suffix(')'))
        .unwrap_or_else(|| panic!("not a translate: {t}"));
    let mut it = inner.split([',', ' ']).filter(|s| !s.is_empty());
    (
        it.next().unwrap().parse().unwrap(),
        it.next().unwrap().parse().unwrap(),
    )
}

fn has_class(n: &roxmltree::Node, c: &str) -> bool {
    n.attribute("class")
        .is_some_and(|a| a.split_whitespace().any(|w| w == c))
}

/// Data markers outside the legend.
fn markers(doc: &roxmltree::Document) -> Vec<Marker> {
    doc.descendants()
        .filter(|n| has_class(n, "marker"))
        .filter(|n| !n.ancestors().any(|a| has_class(&a, "legend")))
        .map(|n| {
            let (x, y) = translate(n.attribute("transform").expect("a placed marker"));
            let child = n.first_element_child().expect("a shape");
            Marker {
                series: n.attribute("data-series").unwrap_or_default().to_string(),
                class: n.attribute("class").unwrap().to_string(),
                x,
                y,
                shape: format!(
                    "{}{}",
                    child.tag_name().name(),
                    child.attribute("points").unwrap_or_default()
                ),
            }
        })
        .collect()
}

/// x, y, width, height of a `rect`.
fn rect(n: &roxmltree::Node) -> [f64; 4] {
    let a = |k: &str| -> f64 { n.attribute(k).unwrap().parse().unwrap() };
    [a("x"), a("y"), a("width"), a("height")]
}

fn plot_area(doc: &roxmltree::Document) -> [f64; 4] {
    let clip = doc
        .descendants()
        .find(|n| n.has_tag_name("clipPath") && n.attribute("id") == Some("plot-area"))
        .expect("the plot-area clip path");
    rect(&clip.first_element_child().unwrap())
}

fn texts(doc: &roxmltree::Document) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| {
            n.descendants()
                .filter(|c| c.is_text())
                .map(|c| c.text().unwrap_or_default())
                .collect::<String>()
                .trim()
                .to_string()
        })
        .collect()
}

/// Tick labels must be rounded: no run of 6 or more digits (as in 4.9999999999999996e-6).
fn assert_rounded(doc: &roxmltree::Document) {
    for t in texts(doc) {
        let mut run = 0;
        for c in t.chars() {
            run = if c.is_ascii_digit() { run + 1 } else { 0 };
            assert!(run < 6, "unrounded label {t:?}");
        }
    }
}

/// The x positions of one series' markers, in scan order, equally spaced within a pixel.
fn assert_equally_spaced(ms: &[Marker], series: &str, n: usize) {
    let xs: Vec<f64> = ms
        .iter()
        .filter(|m| m.series == series)
        .map(|m| m.x)
        .collect();
    assert_eq!(xs.len(), n, "{series}: one marker per point");
    let step = (xs[n - 1] - xs[0]) / (n - 1) as f64;
    assert!(step.abs() > 20.0, "{series}: points spread over the axis");
    for (i, x) in xs.iter().enumerate() {
        // one pixel: positions are rounded to 0.1 px, the axis mapping is exact
        assert!(
            (x - xs[0] - step * i as f64).abs() < 1.0,
            "{series}: uneven spacing {xs:?}"
        );
    }
}

fn assert_inside(ms: &[Marker], area: [f64; 4]) {
    for m in ms {
        assert!(
            m.x >= area[0] - 0.5
                && m.x <= area[0] + area[2] + 0.5
                && m.y >= area[1] - 0.5
                && m.y <= area[1] + area[3] + 0.5,
            "{m:?} outside the plotting area {area:?}"
        );
    }
}

// Used to hang for minutes (a log axis built on a range through zero).
#[test]
fn a_linear_scan_through_zero_is_drawn_on_a_linear_axis() {
    let f = washboard("zero");
    let svg = scan_picture(&f, "potential.constants.f", "-3", "3", "7", &[]);
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    let ms = markers(&doc);
    assert_equally_spaced(&ms, "mfpt", 7);
    assert_equally_spaced(&ms, "smoluchowski", 7);
    assert_inside(&ms, plot_area(&doc));
    let t = texts(&doc);
    for tick in ["-2", "0", "2"] {
        assert!(t.iter().any(|s| s == tick), "tick {tick} missing: {t:?}");
    }
    assert_rounded(&doc);
    let _ = std::fs::remove_file(f);
}

// Used to give an empty picture (all points at the left edge of a broken log axis).
#[test]
fn an_all_negative_range_is_drawn() {
    let f = washboard("negative");
    let svg = scan_picture(&f, "potential.constants.f", "-3", "-0.5", "6", &[]);
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    let ms = markers(&doc);
    assert_equally_spaced(&ms, "mfpt", 6);
    assert_inside(&ms, plot_area(&doc));
    assert!(texts(&doc).iter().any(|s| s == "-2"));
    let _ = std::fs::remove_file(f);
}

// Equally spaced values fall equally spaced on a linear axis; with --log, geometrically spaced
// values fall equally spaced on the log axis. Ticks of a range of micro-units read 2e-6, not
// 1.9999999999999999e-6.
#[test]
fn the_axis_is_logarithmic_only_with_log() {
    let f = washboard("log");
    let svg = scan_picture(&f, "potential.constants.f", "0.5", "3", "6", &[]);
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert_equally_spaced(&markers(&doc), "mfpt", 6);
    let svg = scan_picture(&f, "potential.constants.f", "0.1", "3", "6", &["--log"]);
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert_equally_spaced(&markers(&doc), "mfpt", 6);
    assert_rounded(&doc);
    let svg = scan_picture(&f, "potential.constants.f", "1e-6", "5e-6", "5", &[]);
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert_equally_spaced(&markers(&doc), "mfpt", 5);
    assert!(texts(&doc).iter().any(|s| s == "2e-6"), "{:?}", texts(&doc));
    assert_rounded(&doc);
    let _ = std::fs::remove_file(f);
}

#[test]
fn a_log_scan_through_zero_is_refused_in_one_line() {
    let f = washboard("refused");
    let out = Command::cargo_bin("escapade")
        .unwrap()
        .args([
            "scan",
            f.to_str().unwrap(),
            "--vary",
            "potential.constants.f",
            "--from",
            "-1",
            "--to",
            "1",
            "--log",
            "--plot",
            tmp("refused.svg").to_str().unwrap(),
        ])
        .timeout(Duration::from_secs(60))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(err.contains("--log"), "{err}");
    let _ = std::fs::remove_file(f);
}

/// Which rate keys hold (the `rate` table's "holds here") at one scenario value.
fn holding(file: &Path, set: &str) -> Vec<String> {
    let out = Command::cargo_bin("escapade")
        .unwrap()
        .args(["rate", file.to_str().unwrap(), "--json", "--set", set])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    v["formulas"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| r["valid"].as_bool() == Some(true))
        .map(|r| r["key"].as_str().unwrap().to_string())
        .collect()
}

// Every curve carries a marker at every point; it is filled where `rate` says the formula holds
// there and hollow where it does not; curves differ in marker shape as well as colour.
#[test]
fn arrhenius_markers_show_where_each_rate_holds() {
    let f = example("isomerization_kjmol.toml");
    let temps = ["280", "300", "320", "340", "360"];
    let svg = scan_picture(&f, "units.temperature", "280", "360", "5", &[]);
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    let ms = markers(&doc);
    let mut series: Vec<&str> = ms.iter().map(|m| m.series.as_str()).collect();
    series.dedup();
    assert!(series.len() >= 5, "{series:?}");
    for s in &series {
        let mine: Vec<&Marker> = ms.iter().filter(|m| m.series == *s).collect();
        assert_eq!(mine.len(), temps.len(), "{s}: a marker at every point");
        // x = 1000/T falls with T: the markers come in scan order from right to left
        for (m, t) in mine.iter().zip(temps) {
            let holds = holding(&f, &format!("units.temperature={t}"));
            let want = if holds.iter().any(|h| h == s) {
                "holds"
            } else {
                "outside"
            };
            assert!(
                m.class.split_whitespace().any(|c| c == want),
                "{s} at T = {t}: {} (want {want})",
                m.class
            );
        }
    }
    let mut shapes: Vec<(&str, &str)> = Vec::new();
    for s in &series {
        let m = ms.iter().find(|m| m.series == *s).unwrap();
        assert!(
            !shapes.iter().any(|(_, sh)| *sh == m.shape),
            "{s} has the marker shape of {:?}",
            shapes.iter().find(|(_, sh)| *sh == m.shape)
        );
        shapes.push((s, &m.shape));
    }
    assert_legend_clear(&doc);
}

/// The legend box exists and no data marker (with its radius) lies under it.
fn assert_legend_clear(doc: &roxmltree::Document) {
    let legend = doc
        .descendants()
        .find(|n| has_class(n, "legend-box"))
        .expect("a legend box");
    let [lx, ly, lw, lh] = rect(&legend);
    // the legend group may be shifted as a whole
    let (dx, dy) = legend
        .ancestors()
        .filter_map(|a| a.attribute("transform"))
        .filter(|t| t.starts_with("translate"))
        .map(translate)
        .fold((0.0, 0.0), |a, b| (a.0 + b.0, a.1 + b.1));
    let (lx, ly) = (lx + dx, ly + dy);
    let ms = markers(doc);
    assert!(!ms.is_empty());
    // 7 px: the largest marker radius plus a pixel
    for m in &ms {
        let inside = m.x > lx - 7.0 && m.x < lx + lw + 7.0 && m.y > ly - 7.0 && m.y < ly + lh + 7.0;
        assert!(!inside, "{m:?} under the legend [{lx}, {ly}, {lw}, {lh}]");
    }
}

// The friction scan of the README, smaller: at weak friction the simulated points and the
// energy-diffusion line sit at the lower left, where the legend used to be. Kramers holds from
// δ = 10 (γ ≈ 1.4) on, so its markers are both hollow and filled.
#[test]
fn the_friction_scan_legend_hides_no_data() {
    let f = example("double_well_reduced.toml");
    let svg = scan_picture(
        &f,
        "particle.friction",
        "0.01",
        "300",
        "5",
        &["--log", "--simulate", "--set", "simulation.trajectories=40"],
    );
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    let ms = markers(&doc);
    assert_eq!(ms.iter().filter(|m| m.series == "simulation").count(), 5);
    assert!(
        ms.iter()
            .any(|m| m.series == "kramers" && m.class.contains("holds"))
    );
    assert!(
        ms.iter()
            .any(|m| m.series == "kramers" && m.class.contains("outside"))
    );
    assert_inside(&ms, plot_area(&doc));
    assert_legend_clear(&doc);
    assert_rounded(&doc);
}

/// Estimated box of a text element: sans-serif glyphs are about 0.6 em wide on average.
fn text_box(n: &roxmltree::Node) -> [f64; 4] {
    let a = |k: &str| -> f64 { n.attribute(k).unwrap_or("0").parse().unwrap() };
    let size = a("font-size");
    let chars = n
        .descendants()
        .filter(|c| c.is_text())
        .map(|c| c.text().unwrap_or_default().trim().chars().count())
        .sum::<usize>() as f64;
    let w = 0.6 * size * chars;
    let x = match n.attribute("text-anchor") {
        Some("middle") => a("x") - w / 2.0,
        Some("end") => a("x") - w,
        _ => a("x"),
    };
    // y is the baseline: the glyphs reach about 0.8 em above it and 0.2 em below
    [x, a("y") - 0.8 * size, w, size]
}

fn overlap(a: [f64; 4], b: [f64; 4]) -> bool {
    a[0] < b[0] + b[2] && b[0] < a[0] + a[2] && a[1] < b[1] + b[3] && b[1] < a[1] + a[3]
}

// A barrier and a product minimum (the target) 0.1 length units and 0.05 kT apart: their labels
// used to touch.
#[test]
fn survey_labels_do_not_overlap_and_the_title_is_the_scenarios() {
    let f = tmp("close.toml");
    std::fs::write(
        &f,
        "title = \"two close stationary points\"\n[particle]\ndiffusion = 1.0\n[potential]\nexpr = \"c*(x^4/4 + 0.9*x^3/3 - 0.05*x^2)\"\ndomain = [-1.6, 1.2]\n[potential.constants]\nc = 90.0\n[states]\nstart = -1.0\n",
    )
    .unwrap();
    let svg = picture(&["survey", f.to_str().unwrap()], &tmp("close.svg"));
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    assert!(
        texts(&doc)
            .iter()
            .any(|t| t == "two close stationary points"),
        "title missing"
    );
    let labels: Vec<roxmltree::Node> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text") && has_class(n, "point-label"))
        .collect();
    let names: Vec<String> = labels
        .iter()
        .map(|n| n.text().unwrap_or_default().trim().to_string())
        .collect();
    for want in ["reactant", "barrier", "target"] {
        assert!(
            names.iter().any(|n| n.starts_with(want)),
            "{want}: {names:?}"
        );
    }
    let boxes: Vec<[f64; 4]> = labels.iter().map(text_box).collect();
    for i in 0..boxes.len() {
        for j in i + 1..boxes.len() {
            assert!(
                !overlap(boxes[i], boxes[j]),
                "{} and {} overlap: {:?} {:?}",
                names[i],
                names[j],
                boxes[i],
                boxes[j]
            );
        }
    }
    // and no label covers a marker of another point (6 px marker radius)
    for p in doc.descendants().filter(|n| has_class(n, "point")) {
        let (x, y) = translate(p.attribute("transform").unwrap());
        for (b, name) in boxes.iter().zip(&names) {
            assert!(
                !overlap(*b, [x - 6.0, y - 6.0, 12.0, 12.0]),
                "{name} covers the marker at ({x}, {y})"
            );
        }
    }
    // without a title, the file name
    let bare = tmp("untitled.toml");
    std::fs::write(
        &bare,
        std::fs::read_to_string(&f)
            .unwrap()
            .replace("title = \"two close stationary points\"\n", ""),
    )
    .unwrap();
    let svg = picture(&["survey", bare.to_str().unwrap()], &tmp("untitled.svg"));
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let name = bare.file_name().unwrap().to_str().unwrap();
    assert!(texts(&doc).iter().any(|t| t == name), "file name as title");
    let _ = std::fs::remove_file(f);
    let _ = std::fs::remove_file(bare);
}
