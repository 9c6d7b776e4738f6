//! SVG pictures (plotters, SVG backend only: text stays SVG text, no font libraries needed).
//!
//! - friction scan: k/k_TST against γ/ω_b on log–log axes, each theory a line, the simulation as
//!   points with 95% error bars, the regime bands shaded and labelled;
//! - temperature scan: Arrhenius plot, ln k against 1/T, with the fitted apparent activation energy
//!   and prefactor in the legend;
//! - force scan: ln k against the tilt force, with the fitted distance to the barrier;
//! - any other key: k against the value.

use crate::scan::{Kind, RATE_KEYS, ScanReport, rate_of};
use plotters::prelude::*;

const W: u32 = 900;
const H: u32 = 600;

fn colour(i: usize) -> RGBColor {
    const C: [RGBColor; 10] = [
        RGBColor(31, 119, 180),
        RGBColor(255, 127, 14),
        RGBColor(44, 160, 44),
        RGBColor(214, 39, 40),
        RGBColor(148, 103, 189),
        RGBColor(140, 86, 75),
        RGBColor(227, 119, 194),
        RGBColor(127, 127, 127),
        RGBColor(188, 189, 34),
        RGBColor(23, 190, 207),
    ];
    C[i % C.len()]
}

fn label(key: &str) -> &'static str {
    match key {
        "tst" => "harmonic TST",
        "tst_exact" => "exact 1-D TST",
        "kramers" => "Kramers",
        "smoluchowski" => "Smoluchowski",
        "energy_diffusion" => "energy diffusion",
        "turnover" => "Mel'nikov-Meshkov",
        "pgh" => "Pollak-Grabert-Hanggi",
        "mfpt" => "1/MFPT (overdamped)",
        "grote_hynes" => "Grote-Hynes",
        "well_to_well" => "well-to-well",
        _ => "simulation",
    }
}

fn time_unit(r: &ScanReport) -> &str {
    if r.units.time == "1" {
        "τ"
    } else {
        &r.units.time
    }
}

/// One series: name, points (x, y), and for the simulation (x, y, y_lo, y_hi).
struct Series {
    name: String,
    pts: Vec<(f64, f64)>,
}

fn bounds(vals: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in vals.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    if hi <= lo {
        hi = lo + 1.0;
    }
    (lo, hi)
}

/// The scan as an SVG document.
pub fn scan(r: &ScanReport) -> String {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (W, H)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let _ = draw(&root, r);
        let _ = root.present();
    }
    buf
}

fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, plotters::coord::Shift>,
    r: &ScanReport,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let tu = time_unit(r);
    let lu = if r.units.length == "1" {
        "L"
    } else {
        &r.units.length
    };
    // x: friction scans use γ/ω_b when known; temperature scans 1/T
    let x_of = |p: &crate::scan::Point| match r.kind {
        Kind::Friction => p.gamma_over_omega_barrier.unwrap_or(p.value),
        Kind::Temperature => 1000.0 / p.value,
        _ => p.value,
    };
    let friction = r.kind == Kind::Friction;
    let norm = friction && r.points.iter().all(|p| p.rates.tst.is_some());
    let y_of = |p: &crate::scan::Point, k: f64| -> f64 {
        let k = if norm {
            k / p.rates.tst.unwrap_or(1.0)
        } else {
            k
        };
        match r.kind {
            Kind::Temperature | Kind::Force => k.ln(),
            _ => k,
        }
    };
    let keys: Vec<&str> = RATE_KEYS
        .iter()
        .copied()
        .filter(|k| !(norm && *k == "tst"))
        .filter(|k| r.points.iter().all(|p| rate_of(&p.rates, k).is_some()))
        .collect();
    let series: Vec<Series> = keys
        .iter()
        .map(|k| Series {
            name: label(k).to_string(),
            pts: r
                .points
                .iter()
                .map(|p| (x_of(p), y_of(p, rate_of(&p.rates, k).unwrap_or(f64::NAN))))
                .collect(),
        })
        .collect();
    let sims: Vec<(f64, f64, f64, f64)> = r
        .points
        .iter()
        .filter_map(|p| {
            p.simulation.as_ref().map(|s| {
                (
                    x_of(p),
                    y_of(p, s.rate),
                    y_of(p, s.rate_ci95[0].max(s.rate * 1e-3)),
                    y_of(p, s.rate_ci95[1]),
                )
            })
        })
        .collect();
    let (x0, x1) = bounds(r.points.iter().map(x_of));
    let (y0, y1) = bounds(
        series
            .iter()
            .flat_map(|s| s.pts.iter().map(|p| p.1))
            .chain(sims.iter().flat_map(|s| [s.2, s.3])),
    );
    let (xlabel, ylabel) = match r.kind {
        Kind::Friction => (
            if r.points[0].gamma_over_omega_barrier.is_some() {
                "γ/ω_b".to_string()
            } else {
                r.key.clone()
            },
            if norm {
                "k / k_TST".to_string()
            } else {
                format!("k (1/{tu})")
            },
        ),
        Kind::Temperature => ("1000 / T (1/K)".to_string(), format!("ln(k · {tu})")),
        Kind::Force => (
            format!("tilt force ({}/{lu})", r.units.energy),
            format!("ln(k · {tu})"),
        ),
        Kind::Other => (r.key.clone(), format!("k (1/{tu})")),
    };
    let title = match r.kind {
        Kind::Friction => "friction scan: the turnover",
        Kind::Temperature => "Arrhenius plot",
        Kind::Force => "rate under a tilt force",
        Kind::Other => "scan",
    };
    let log_axes = matches!(r.kind, Kind::Friction | Kind::Other);
    let mut b = ChartBuilder::on(root);
    b.caption(title, ("sans-serif", 24))
        .margin(20)
        .x_label_area_size(50)
        .y_label_area_size(80);
    if log_axes {
        let pad = |a: f64, b: f64| (a / (b / a).powf(0.05), b * (b / a).powf(0.05));
        let (xa, xb) = pad(x0.max(1e-300), x1.max(x0 * 1.0001));
        let (ya, yb) = pad(y0.max(1e-300), y1.max(y0 * 1.0001));
        // k/k_TST above a few is where the overdamped formulas leave their regime: clip there
        let yb = if norm { yb.min(5.0) } else { yb };
        let ya = ya.min(yb / 10.0);
        let mut chart = b.build_cartesian_2d((xa..xb).log_scale(), (ya..yb).log_scale())?;
        if friction && let (Some(ib), Some(wb)) = (r.action_first, r.omega_barrier_first) {
            // δ = γ I_b/kT: δ = 1 and 10 at γ/ω_b = δ/(I_b ω_b); overdamped from γ/ω_b = 5
            let e1 = 1.0 / (ib * wb);
            let e10 = 10.0 / (ib * wb);
            let bands = [
                (
                    xa,
                    e1.clamp(xa, xb),
                    "energy diffusion",
                    RGBColor(230, 240, 255),
                ),
                (
                    e1.clamp(xa, xb),
                    e10.clamp(xa, xb),
                    "turnover",
                    RGBColor(255, 245, 225),
                ),
                (
                    e10.clamp(xa, xb),
                    5f64.clamp(xa, xb),
                    "spatial diffusion",
                    RGBColor(235, 250, 235),
                ),
                (
                    5f64.clamp(xa, xb),
                    xb,
                    "overdamped",
                    RGBColor(245, 235, 250),
                ),
            ];
            for (a, bnd, name, col) in bands {
                if bnd > a {
                    chart.draw_series(std::iter::once(Rectangle::new(
                        [(a, ya), (bnd, yb)],
                        col.filled(),
                    )))?;
                    chart.draw_series(std::iter::once(Text::new(
                        name,
                        (a * 1.05, yb / (yb / ya).powf(0.04)),
                        ("sans-serif", 14),
                    )))?;
                }
            }
        }
        chart
            .configure_mesh()
            .x_desc(xlabel)
            .y_desc(ylabel)
            .light_line_style(RGBColor(220, 220, 220).mix(0.5))
            .label_style(("sans-serif", 16))
            .draw()?;
        for (i, s) in series.iter().enumerate() {
            let c = colour(i);
            // points beyond the clipped range are left out rather than drawn along the edge
            let inside = s.pts.iter().copied().filter(|p| p.1 <= yb && p.1 >= ya);
            chart
                .draw_series(LineSeries::new(inside, c.stroke_width(2)))?
                .label(s.name.clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], c.stroke_width(2))
                });
        }
        if !sims.is_empty() {
            chart.draw_series(sims.iter().map(|&(x, _, lo, hi)| {
                PathElement::new(vec![(x, lo), (x, hi)], BLACK.stroke_width(1))
            }))?;
            chart
                .draw_series(
                    sims.iter()
                        .map(|&(x, y, _, _)| Circle::new((x, y), 4, BLACK.filled())),
                )?
                .label("simulation (95%)")
                .legend(|(x, y)| Circle::new((x + 10, y), 4, BLACK.filled()));
        }
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .label_font(("sans-serif", 14))
            .position(SeriesLabelPosition::LowerLeft)
            .draw()?;
    } else {
        let px = 0.05 * (x1 - x0);
        let py = 0.08 * (y1 - y0);
        let mut chart = b.build_cartesian_2d((x0 - px)..(x1 + px), (y0 - py)..(y1 + py))?;
        chart
            .configure_mesh()
            .x_desc(xlabel)
            .y_desc(ylabel)
            .label_style(("sans-serif", 16))
            .draw()?;
        for (i, s) in series.iter().enumerate() {
            let c = colour(i);
            let fit = r.fits.iter().find(|f| label(&f.rate) == s.name);
            let name = match (r.kind, fit) {
                (Kind::Temperature, Some(f)) => format!(
                    "{}: Ea = {:.4} [{:.4}, {:.4}] {}, A = {:.3e} /{tu}",
                    s.name, f.value, f.value_ci95[0], f.value_ci95[1], r.units.energy, f.prefactor
                ),
                (Kind::Force, Some(f)) => format!(
                    "{}: x‡ = {:.4} [{:.4}, {:.4}] {lu}",
                    s.name, f.value, f.value_ci95[0], f.value_ci95[1]
                ),
                _ => s.name.clone(),
            };
            chart
                .draw_series(LineSeries::new(s.pts.iter().copied(), c.stroke_width(2)))?
                .label(name)
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], c.stroke_width(2))
                });
        }
        if !sims.is_empty() {
            chart.draw_series(sims.iter().map(|&(x, _, lo, hi)| {
                PathElement::new(vec![(x, lo), (x, hi)], BLACK.stroke_width(1))
            }))?;
            let fit = r.fits.iter().find(|f| f.rate == "simulation");
            let name = match (r.kind, fit) {
                (Kind::Temperature, Some(f)) => format!(
                    "simulation: Ea = {:.4} [{:.4}, {:.4}] {}",
                    f.value, f.value_ci95[0], f.value_ci95[1], r.units.energy
                ),
                (Kind::Force, Some(f)) => format!(
                    "simulation: x‡ = {:.4} [{:.4}, {:.4}] {lu}",
                    f.value, f.value_ci95[0], f.value_ci95[1]
                ),
                _ => "simulation (95%)".to_string(),
            };
            chart
                .draw_series(
                    sims.iter()
                        .map(|&(x, y, _, _)| Circle::new((x, y), 4, BLACK.filled())),
                )?
                .label(name)
                .legend(|(x, y)| Circle::new((x + 10, y), 4, BLACK.filled()));
        }
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .label_font(("sans-serif", 13))
            // lines fall to the right in an Arrhenius plot and rise with the force: the empty corner
            .position(if r.kind == Kind::Temperature {
                SeriesLabelPosition::LowerLeft
            } else {
                SeriesLabelPosition::UpperLeft
            })
            .draw()?;
    }
    Ok(())
}

/// U(x) with the reactant, barrier, product and target marked and a 1 kT scale bar (`survey`).
pub fn landscape(
    pot: &dyn crate::potential::Potential,
    l: &crate::landscape::Landscape,
    units: &crate::units::UnitSystem,
) -> String {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (W, H)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let _ = draw_landscape(&root, pot, l, units);
        let _ = root.present();
    }
    buf
}

fn draw_landscape<DB: DrawingBackend>(
    root: &DrawingArea<DB, plotters::coord::Shift>,
    pot: &dyn crate::potential::Potential,
    l: &crate::landscape::Landscape,
    units: &crate::units::UnitSystem,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let (lo, hi) = pot.domain();
    let e = |x: f64| units.energy_from_kt(pot.u(x) - l.u_reactant);
    let n = 800;
    let pts: Vec<(f64, f64)> = (0..=n)
        .map(|i| {
            let x = lo + (hi - lo) * f64::from(i) / f64::from(n);
            (x, e(x))
        })
        .collect();
    // show up to twice the barrier (walls of high potentials would flatten the picture)
    let top = units.energy_from_kt(2.0 * l.barrier_height.max(1.0));
    let (ymin, _) = bounds(pts.iter().map(|p| p.1));
    let lu = if units.names.length == "1" {
        "L"
    } else {
        &units.names.length
    };
    let mut chart = ChartBuilder::on(root)
        .caption("potential", ("sans-serif", 24))
        .margin(20)
        .x_label_area_size(50)
        .y_label_area_size(80)
        .build_cartesian_2d(lo..hi, (ymin - 0.05 * top)..top)?;
    chart
        .configure_mesh()
        .x_desc(format!("x ({lu})"))
        .y_desc(format!("U − U(reactant) ({})", units.names.energy))
        .label_style(("sans-serif", 16))
        .draw()?;
    chart.draw_series(LineSeries::new(
        pts.into_iter().filter(|p| p.1 <= top),
        colour(0).stroke_width(2),
    ))?;
    let mut marks = vec![
        ("reactant", l.reactant, colour(2)),
        ("barrier", l.barrier, colour(3)),
        ("target", l.target, colour(4)),
    ];
    if let Some(p) = l.product
        && (p - l.target).abs() > 1e-9 * (hi - lo)
    {
        marks.push(("product", p, colour(1)));
    }
    for (name, x, c) in marks {
        let y = e(x);
        chart.draw_series(std::iter::once(Circle::new((x, y), 6, c.filled())))?;
        chart.draw_series(std::iter::once(Text::new(
            name,
            (x, y + 0.04 * top),
            ("sans-serif", 15),
        )))?;
    }
    // a 1 kT scale bar at the right
    let kt = units.energy_from_kt(1.0);
    let xb = hi - 0.04 * (hi - lo);
    let y0 = ymin + 0.1 * top;
    chart.draw_series(std::iter::once(PathElement::new(
        vec![(xb, y0), (xb, y0 + kt)],
        BLACK.stroke_width(3),
    )))?;
    chart.draw_series(std::iter::once(Text::new(
        "1 kT",
        (xb - 0.07 * (hi - lo), y0 + 0.5 * kt),
        ("sans-serif", 15),
    )))?;
    Ok(())
}

/// The survival curve of a brute-force run (fraction not yet escaped, log scale) with the fitted
/// exponential e^{−kt} (`simulate --plot`).
pub fn survival(outcomes: &[crate::stats::Outcome], dt: f64, rate: f64, time_unit: &str) -> String {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (W, H)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let _ = draw_survival(&root, outcomes, dt, rate, time_unit);
        let _ = root.present();
    }
    buf
}

fn draw_survival<DB: DrawingBackend>(
    root: &DrawingArea<DB, plotters::coord::Shift>,
    outcomes: &[crate::stats::Outcome],
    dt: f64,
    rate: f64,
    tu: &str,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let n = outcomes.len().max(1) as f64;
    let mut t: Vec<f64> = outcomes
        .iter()
        .filter(|o| o.escaped)
        .map(|o| o.steps as f64 * dt)
        .collect();
    t.sort_by(f64::total_cmp);
    let tmax = t.last().copied().unwrap_or(1.0).max(1e-300);
    let floor = (0.5 / n).max(1e-6);
    let steps: Vec<(f64, f64)> = std::iter::once((0.0, 1.0))
        .chain(
            t.iter()
                .enumerate()
                .flat_map(|(i, &ti)| [(ti, 1.0 - i as f64 / n), (ti, 1.0 - (i + 1) as f64 / n)]),
        )
        .filter(|p| p.1 >= floor)
        .collect();
    let mut chart = ChartBuilder::on(root)
        .caption("survival: fraction not yet escaped", ("sans-serif", 24))
        .margin(20)
        .x_label_area_size(50)
        .y_label_area_size(80)
        .build_cartesian_2d(0.0..tmax, (floor..1.2).log_scale())?;
    chart
        .configure_mesh()
        .x_desc(format!("t ({tu})"))
        .y_desc("S(t)")
        .label_style(("sans-serif", 16))
        .draw()?;
    chart
        .draw_series(LineSeries::new(steps, BLACK.stroke_width(2)))?
        .label("simulated")
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK.stroke_width(2)));
    let c = colour(3);
    chart
        .draw_series(LineSeries::new(
            (0..=200)
                .map(|i| {
                    let x = tmax * f64::from(i) / 200.0;
                    (x, (-rate * x).exp())
                })
                .filter(|p| p.1 >= floor),
            c.stroke_width(2),
        ))?
        .label(format!("exp(−k t), k = {rate:.4e} /{tu}"))
        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], c.stroke_width(2)));
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .label_font(("sans-serif", 14))
        .position(SeriesLabelPosition::UpperRight)
        .draw()?;
    Ok(())
}
