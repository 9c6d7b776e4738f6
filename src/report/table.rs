//! Plain-text renderer for people: comfy-table tables with the units in the column headings.

use super::{Header, LandscapeOut, RateReport, SurveyReport};
use crate::units::UnitNames;
use comfy_table::{
    Cell, ColumnConstraint, ContentArrangement, Table, Width, presets::UTF8_FULL_CONDENSED,
};
use std::fmt::Write;

/// Six significant digits, switching to scientific notation outside [1e-3, 1e6).
pub fn num(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    if !v.is_finite() {
        return format!("{v}");
    }
    let a = v.abs();
    if (1e-3..1e6).contains(&a) {
        let digits = (5 - a.log10().floor() as i32).max(0) as usize;
        format!("{v:.digits$}")
    } else {
        format!("{v:.5e}")
    }
}

/// `v` rounded to `n` significant digits (1..=17).
pub(crate) fn round_sig(v: f64, n: usize) -> f64 {
    format!("{:.*e}", n.clamp(1, 17) - 1, v)
        .parse()
        .unwrap_or(v)
}

/// `v` with `n` significant digits and no trailing zeros: decimal from 0.001 to below `dec_max`,
/// otherwise mantissa e exponent (0.00354, 7.03, 1.23e-4, 1.5e3).
pub(crate) fn sig(v: f64, n: usize, dec_max: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let s = format!("{:.*e}", n.clamp(1, 17) - 1, v);
    let (m, e) = s.split_once('e').unwrap_or((&s, "0"));
    let e: i32 = e.parse().unwrap_or(0);
    let trim = |t: &str| -> String {
        if t.contains('.') {
            t.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            t.to_string()
        }
    };
    if e >= -3 && 10f64.powi(e) < dec_max {
        let d = (n as i32 - 1 - e).max(0) as usize;
        trim(&format!("{v:.d$}"))
    } else {
        format!("{}e{e}", trim(m))
    }
}

/// A scan cell: three significant digits.
fn short(v: f64) -> String {
    sig(v, 3, 1e5)
}

/// A scan cell with its interval, relative when that reads well: "5.01e-5 −11/+12%",
/// "0.0311 ±6%"; otherwise "v [lo, hi]" (a value near zero or an interval of more than a factor
/// 10).
fn short_iv(v: f64, [lo, hi]: [f64; 2]) -> String {
    let (down, up) = ((v - lo) / v.abs() * 100.0, (hi - v) / v.abs() * 100.0);
    if v != 0.0 && (0.0..=90.0).contains(&down) && (0.0..=900.0).contains(&up) {
        let (d, u) = (sig(down, 2, 1e5), sig(up, 2, 1e5));
        if d == u {
            format!("{} ±{d}%", short(v))
        } else {
            format!("{} −{d}/+{u}%", short(v))
        }
    } else {
        format!("{} [{}, {}]", short(v), short(lo), short(hi))
    }
}

/// The scanned values with the fewest significant digits (3 to 6) that keep them apart.
fn scan_values(vals: &[f64]) -> Vec<String> {
    (3..=6)
        .map(|n| vals.iter().map(|&v| sig(v, n, 1e5)).collect::<Vec<_>>())
        .find(|s| s.windows(2).all(|w| w[0] != w[1]))
        .unwrap_or_else(|| vals.iter().map(|&v| sig(v, 6, 1e5)).collect())
}

/// "v [lo, hi]".
fn with_ci(v: f64, [lo, hi]: [f64; 2]) -> String {
    format!("{} [{}, {}]", num(v), num(lo), num(hi))
}

fn opt(v: Option<f64>) -> String {
    v.map_or_else(|| "—".into(), num)
}

/// Display names of the units ("1" shows as L and τ).
struct U<'a> {
    e: &'a str,
    l: &'a str,
    t: &'a str,
}

impl<'a> U<'a> {
    fn new(n: &'a UnitNames) -> Self {
        Self {
            e: &n.energy,
            l: if n.length == "1" { "L" } else { &n.length },
            t: if n.time == "1" { "τ" } else { &n.time },
        }
    }
}

fn table() -> Table {
    let mut t = Table::new();
    t.load_style(UTF8_FULL_CONDENSED)
        .set_content_arrangement(ContentArrangement::Dynamic)
        .set_width(110);
    t
}

/// Sets column widths so that comfy-table wraps only at spaces and never breaks a word: every
/// column at least as wide as its longest word (heading or cell). Then, within the table's
/// width, the columns whose cells need the least extra room to fit on one line get it first, so
/// as few cells as possible wrap (headings may).
fn whole_words(t: &mut Table) {
    let longest = |s: &str| {
        s.split_whitespace()
            .map(|w| w.chars().count())
            .max()
            .unwrap_or(0)
    };
    let line = |s: &str| s.lines().map(|l| l.chars().count()).max().unwrap_or(0);
    let mut min: Vec<usize> = Vec::new();
    let mut want: Vec<usize> = Vec::new();
    let header = t.header().map(|h| (h, true));
    for (row, is_head) in header.into_iter().chain(t.row_iter().map(|r| (r, false))) {
        for (i, c) in row.cell_iter().enumerate() {
            if min.len() <= i {
                min.resize(i + 1, 0);
                want.resize(i + 1, 0);
            }
            let text = c.content();
            min[i] = min[i].max(longest(&text));
            if !is_head {
                want[i] = want[i].max(line(&text));
            }
        }
    }
    // a space of padding on each side and one border per column, and the last border
    let frame = 3 * min.len() + 1;
    let mut room = t
        .width()
        .map_or(usize::MAX, usize::from)
        .saturating_sub(frame + min.iter().sum::<usize>());
    let mut width = min.clone();
    let mut order: Vec<usize> = (0..min.len()).collect();
    order.sort_by_key(|&i| want[i].saturating_sub(min[i]));
    for i in order {
        let extra = want[i].saturating_sub(min[i]).min(room);
        width[i] += extra;
        room -= extra;
    }
    for (i, w) in width.into_iter().enumerate() {
        if let Some(col) = t.column_mut(i) {
            // the boundary counts the padding
            let w = u16::try_from(w + 2).unwrap_or(u16::MAX);
            col.set_constraint(ColumnConstraint::LowerBoundary(Width::Fixed(w)));
        }
    }
}

/// Writes a finished table (words kept whole).
fn show(out: &mut String, mut t: Table) {
    whole_words(&mut t);
    let _ = writeln!(out, "{t}");
}

fn header(out: &mut String, h: &Header, names: &UnitNames) {
    if let Some(title) = &h.title {
        let _ = writeln!(out, "{title}");
    }
    let _ = write!(out, "scenario {} · {}", h.source, h.potential);
    match h.temperature {
        Some(t) => {
            let _ = writeln!(out, " · T = {t} K, kT = {} {}", num(h.kt), names.energy);
        }
        None => {
            let _ = writeln!(out, " · energies in kT");
        }
    }
    if names.length == "1" || names.time == "1" {
        let _ = writeln!(
            out,
            "reduced units: L = length unit, τ = time unit = L·sqrt(M/{})",
            names.energy
        );
    }
}

fn landscape(out: &mut String, l: &LandscapeOut, u: &U) {
    // a second energy column in kT only when the scenario's unit is not kT
    let in_kt = u.e == "kT";
    let mut t = table();
    let mut head = vec![
        "point".to_string(),
        format!("x ({})", u.l),
        format!("U − U(reactant) ({})", u.e),
    ];
    if !in_kt {
        head.push("U − U(reactant) (kT)".to_string());
    }
    head.push(format!("U'' ({}/{}²)", u.e, u.l));
    t.set_header(head);
    let u0 = l
        .stationary_points
        .iter()
        .find(|p| p.x == l.reactant)
        .map_or(0.0, |p| p.u);
    let u0_kt = l
        .stationary_points
        .iter()
        .find(|p| p.x == l.reactant)
        .map_or(0.0, |p| p.u_kt);
    for p in &l.stationary_points {
        let role = if p.x == l.reactant {
            "reactant minimum"
        } else if p.x == l.barrier {
            "barrier top"
        } else if Some(p.x) == l.product {
            "product minimum"
        } else {
            match p.kind {
                crate::landscape::Kind::Minimum => "minimum",
                crate::landscape::Kind::Maximum => "maximum",
            }
        };
        let mut row = vec![
            Cell::new(role),
            Cell::new(num(p.x)),
            Cell::new(num(p.u - u0)),
        ];
        if !in_kt {
            row.push(Cell::new(num(p.u_kt - u0_kt)));
        }
        row.push(Cell::new(num(p.curvature)));
        t.add_row(row);
    }
    let rule = match l.target_rule {
        crate::landscape::TargetRule::Given => "target (given)",
        crate::landscape::TargetRule::ProductMinimum => "target (= product minimum)",
        crate::landscape::TargetRule::MetastableDrop => "target (10 kT below the barrier)",
    };
    t.add_row(vec![Cell::new(rule), Cell::new(num(l.target))]);
    t.add_row(vec![Cell::new("reflecting wall"), Cell::new(num(l.wall))]);
    show(out, t);
    let mut s = table();
    s.set_header(vec!["landscape", "value", "unit"]);
    let rows: Vec<(&str, String, String)> = vec![
        ("barrier height E_b", num(l.barrier_height), u.e.to_string()),
        ("E_b / kT", num(l.barrier_height_kt), String::new()),
        ("reaction energy", opt(l.reaction_energy), u.e.to_string()),
        (
            "well frequency ω_a",
            opt(l.omega_reactant),
            format!("1/{}", u.t),
        ),
        (
            "barrier frequency ω_b",
            opt(l.omega_barrier),
            format!("1/{}", u.t),
        ),
        (
            "action I_b at the barrier energy",
            opt(l.action),
            format!("{}·{}", u.e, u.t),
        ),
    ];
    for (k, v, un) in rows {
        s.add_row(vec![k.to_string(), v, un]);
    }
    show(out, s);
    if let Some(f) = &l.fit {
        let _ = match (f.rule, f.chi2) {
            (Some(rule), Some(chi2)) => writeln!(
                out,
                "profile fit: {} ({rule}), χ² = {} over {} rows, {} effective degrees of freedom{}",
                f.method,
                num(chi2),
                f.rows,
                num(f.effective_dof),
                f.noise_source
                    .map_or(String::new(), |s| format!(", σ_U from {s}"))
            ),
            _ => writeln!(out, "profile fit: {} through {} rows", f.method, f.rows),
        };
    }
    if !l.ignored_points.is_empty() {
        let xs: Vec<String> = l.ignored_points.iter().map(|p| num(p.x)).collect();
        let _ = writeln!(
            out,
            "taken for noise (below the significance threshold): {} stationary point(s) at x = {}",
            xs.len(),
            xs.join(", ")
        );
    }
}

fn warnings(out: &mut String, w: &[String]) {
    for line in w {
        let _ = writeln!(out, "warning: {line}");
    }
}

/// Renders `survey`.
pub fn survey(r: &SurveyReport) -> String {
    let mut out = String::new();
    header(&mut out, &r.header, &r.units);
    landscape(&mut out, &r.landscape, &U::new(&r.units));
    warnings(&mut out, &r.warnings);
    out
}

/// Renders `rate`.
pub fn rate(r: &RateReport) -> String {
    let mut out = String::new();
    let u = U::new(&r.units);
    header(&mut out, &r.header, &r.units);
    landscape(&mut out, &r.landscape, &u);
    let reg = &r.regime;
    let _ = writeln!(
        out,
        "regime: {} (E_b = {} kT, γ/ω_b = {}, δ = γ·I_b/kT = {}, A(δ) = {})",
        reg.name.as_str(),
        num(reg.barrier_kt),
        opt(reg.gamma_over_omega_barrier),
        opt(reg.delta),
        opt(r.depopulation)
    );
    if let Some(p) = &r.pgh {
        let _ = writeln!(
            out,
            "unstable normal mode (PGH): energy loss Δ/kT = {}, Υ = A(Δ/kT) = {}, u₀₀² = {}{}",
            num(p.energy_loss),
            num(p.depopulation),
            num(p.u00_squared),
            if p.reflected {
                ", orbit reflected by the wall"
            } else {
                ""
            }
        );
    }
    let mut t = table();
    t.set_header(vec![
        "formula".to_string(),
        format!("rate (1/{})", u.t),
        format!("1/rate ({})", u.t),
        "holds here".to_string(),
        "why".to_string(),
    ]);
    for row in &r.formulas {
        t.add_row(vec![
            Cell::new(row.label),
            Cell::new(opt(row.rate)),
            Cell::new(opt(row.rate.map(|k| 1.0 / k))),
            Cell::new(if row.valid { "yes" } else { "no" }),
            Cell::new(&row.note),
        ]);
    }
    show(&mut out, t);
    let _ = writeln!(
        out,
        "exact overdamped MFPT reactant → target: {} {}",
        num(r.mfpt_time),
        u.t
    );
    if !reg.trusted.is_empty() {
        let trusted: Vec<&str> = reg.trusted.iter().map(|k| k.as_str()).collect();
        let _ = writeln!(out, "trust here: {}", trusted.join(", "));
    }
    if let Some(p) = &r.periodic {
        periodic_theory(&mut out, p, &u);
        if reg.name != crate::theory::regime::RegimeName::Overdamped {
            let _ = writeln!(
                out,
                "note: the exact drift, D_eff and hop rates above are those of overdamped dynamics; in the {} regime inertia matters: the Kramers hop rates apply, and the long simulated trajectories measure the rest",
                reg.name.as_str()
            );
        }
    }
    if let Some(q) = &r.uncertainty {
        uncertainty(&mut out, q, &r.formulas, &u);
    }
    warnings(&mut out, &reg.warnings);
    out
}

/// The rates' spread over perturbed profiles.
fn uncertainty(
    out: &mut String,
    q: &crate::uncertainty::UncertaintyReport,
    rows: &[crate::theory::RateRow],
    u: &U,
) {
    let _ = writeln!(
        out,
        "profile uncertainty: {} perturbed profiles (Gaussian noise of the table's sigma_U, correlation length {} {}, seed {}){}; basic bootstrap intervals (the draws' spread reflected about the unperturbed value, which corrects a shift the noise causes)",
        q.draws,
        num(q.correlation_length),
        u.l,
        q.seed,
        if q.failed > 0 {
            format!(", {} could not be analysed", q.failed)
        } else {
            String::new()
        }
    );
    let mut t = table();
    t.set_header(vec![
        "quantity".to_string(),
        "unperturbed".to_string(),
        "bias-corrected".to_string(),
        "68% interval".to_string(),
        "95% interval".to_string(),
    ]);
    let iv = |v: [f64; 2]| format!("[{}, {}]", num(v[0]), num(v[1]));
    t.add_row(vec![
        "barrier height E_b (kT)".to_string(),
        num(q.barrier.central),
        num(q.barrier.median),
        iv(q.barrier.ci68),
        iv(q.barrier.ci95),
    ]);
    for i in &q.rates {
        let label = rows
            .iter()
            .find(|r| r.key.as_str() == i.key)
            .map_or(i.key, |r| r.label);
        t.add_row(vec![
            format!("{label} (1/{})", u.t),
            num(i.central),
            num(i.median),
            iv(i.ci68),
            iv(i.ci95),
        ]);
    }
    show(out, t);
    for d in &q.decompositions {
        if let (Some(b), Some(p), Some(c)) =
            (d.barrier_share, d.prefactor_share, d.covariance_share)
        {
            let _ = writeln!(
                out,
                "spread of ln k ({}): variance {}; share from the barrier height {}, from the prefactor (curvatures) {}, covariance term {}",
                d.key,
                num(d.var_ln_k),
                num(b),
                num(p),
                num(c)
            );
        }
    }
    if let Some(dn) = &q.diffusion_noise {
        for r in &dn.rates {
            let _ = writeln!(
                out,
                "spread of ln k ({}) by source: variance {} from sigma_U, {} from sigma_D: the {} dominates",
                r.key,
                num(r.var_ln_k_profile),
                num(r.var_ln_k_diffusion),
                if r.dominant == "diffusion" {
                    "diffusion coefficient's error"
                } else {
                    "profile's error"
                }
            );
        }
    }
    warnings(out, &q.warnings);
}

/// Renders `rate` in the running state.
pub fn running(r: &super::RunningReport) -> String {
    let mut out = String::new();
    let u = U::new(&r.units);
    header(&mut out, &r.header, &r.units);
    let _ = writeln!(
        out,
        "running state: the tilt exceeds the critical tilt, so U has no minimum and no escape rate; the particle slides with the drift below"
    );
    periodic_theory(&mut out, &r.periodic, &u);
    warnings(&mut out, &r.warnings);
    out
}

/// The periodic landscape's drift, diffusion and hopping rates (theory).
fn periodic_theory(out: &mut String, p: &super::PeriodicOut, u: &U) {
    let _ = writeln!(
        out,
        "periodic landscape: period L = {} {}, tilt F = {} {}/{} ({} kT per period)",
        num(p.period),
        u.l,
        num(p.tilt),
        u.e,
        u.l,
        num(p.tilt_kt * p.period)
    );
    let mut t = table();
    t.set_header(vec!["quantity", "value", "unit", "what it is"]);
    let vel = format!("{}/{}", u.l, u.t);
    let dif = format!("{}²/{}", u.l, u.t);
    let per = format!("1/{}", u.t);
    let mut rows: Vec<(String, String, String, &str)> = vec![
        (
            "drift velocity".into(),
            num(p.drift),
            vel.clone(),
            "exact overdamped (Stratonovich)",
        ),
        (
            "drift, linear response".into(),
            num(p.drift_linear),
            vel,
            "D_eff(untilted)·F/kT, small-force limit",
        ),
        (
            "effective diffusion D_eff".into(),
            opt(p.effective_diffusion),
            dif.clone(),
            "exact overdamped (Reimann et al. 2001; Lifson-Jackson untilted)",
        ),
        (
            "D_eff of the untilted profile".into(),
            num(p.effective_diffusion_untilted),
            dif,
            "Lifson-Jackson",
        ),
    ];
    if let Some(h) = &p.hopping {
        let k = &h.kt;
        rows.extend([
            (
                format!("forward barrier (at x = {})", num(k.forward_barrier_top)),
                num(h.barrier_forward_energy),
                u.e.to_string(),
                "towards +x",
            ),
            (
                format!("backward barrier (at x = {})", num(k.backward_barrier_top)),
                num(h.barrier_backward_energy),
                u.e.to_string(),
                "towards −x",
            ),
            (
                "forward hop k+".into(),
                num(k.forward),
                per.clone(),
                "exact overdamped, to the next minimum",
            ),
            (
                "backward hop k−".into(),
                num(k.backward),
                per.clone(),
                "exact overdamped, to the previous minimum",
            ),
            (
                "forward hop k+ (Kramers)".into(),
                opt(k.forward_kramers),
                per.clone(),
                "over the forward barrier",
            ),
            (
                "backward hop k− (Kramers)".into(),
                opt(k.backward_kramers),
                per.clone(),
                "over the backward barrier",
            ),
            (
                "forward hop k+ (Smoluchowski)".into(),
                num(k.forward_smoluchowski),
                per.clone(),
                "overdamped, over the forward barrier",
            ),
            (
                "backward hop k− (Smoluchowski)".into(),
                num(k.backward_smoluchowski),
                per,
                "overdamped, over the backward barrier",
            ),
        ]);
    }
    for (a, b, c, d) in rows {
        t.add_row(vec![a, b, c, d.to_string()]);
    }
    show(out, t);
}

fn simulation(out: &mut String, s: &super::SimulationResult, u: &U) {
    sim_run(out, s, u);
    if let (Some(esc), Some(cen)) = (s.escaped, s.censored) {
        sim_ensemble(out, s, esc, cen, u);
    }
    if let Some(f) = &s.details.ffs {
        sim_ffs(out, f, u);
    }
    if let Some(k) = &s.details.reactive_flux {
        sim_reactive_flux(out, k, u);
    }
    if let Some(w) = &s.well_to_well {
        sim_well_to_well(out, w, u);
    }
    if let Some(p) = &s.periodic {
        sim_periodic(out, p, u);
    }
    sim_rate(out, s, u);
    warnings(out, &s.warnings);
}

/// The run: method, dynamics, scheme, dt, seed, threads, time and steps, and why this method.
fn sim_run(out: &mut String, s: &super::SimulationResult, u: &U) {
    let _ = writeln!(
        out,
        "simulation: {} {} ({}), dt = {} {} (default {}), seed {}, {} threads, {:.2} s, {} steps",
        s.method,
        match s.dynamics {
            crate::simulate::Dynamics::Underdamped => "underdamped",
            crate::simulate::Dynamics::Overdamped => "overdamped",
        },
        s.scheme,
        num(s.dt),
        u.t,
        num(s.dt_default),
        s.seed,
        s.threads,
        s.wall_seconds,
        s.total_steps
    );
    let _ = writeln!(out, "method: {}", s.method_reason);
}

/// The ensemble of escapes: counts, rate, MFPT and the shape of the first-passage times.
fn sim_ensemble(out: &mut String, s: &super::SimulationResult, esc: u64, cen: u64, u: &U) {
    let _ = writeln!(
        out,
        "{} trajectories{}, max_time = {} {}",
        s.trajectories,
        s.shard
            .as_ref()
            .map(|k| format!(" (shard {k})"))
            .unwrap_or_default(),
        opt(s.max_time),
        u.t
    );
    let mut t = table();
    t.set_header(vec![
        "escaped".to_string(),
        "censored".to_string(),
        format!("rate (1/{})", u.t),
        "95% interval".to_string(),
        format!("MFPT ± se ({})", u.t),
        format!("median ({})", u.t),
        "CV".to_string(),
        "KS distance (p)".to_string(),
    ]);
    t.add_row(vec![
        esc.to_string(),
        cen.to_string(),
        num(s.rate),
        format!("[{}, {}]", num(s.rate_ci95[0]), num(s.rate_ci95[1])),
        match (s.mfpt, s.mfpt_se) {
            (Some(m), Some(e)) => format!("{} ± {}", num(m), num(e)),
            (Some(m), None) => num(m),
            _ => "—".into(),
        },
        opt(s.median),
        opt(s.cv),
        match (s.ks_distance, s.ks_p_value) {
            (Some(d), Some(p)) => format!("{} ({})", num(d), num(p)),
            _ => "—".into(),
        },
    ]);
    show(out, t);
}

/// Forward flux sampling: its interfaces and the stages between them.
fn sim_ffs(out: &mut String, f: &crate::simulate::ffs::FfsResult, u: &U) {
    let _ = writeln!(
        out,
        "forward flux sampling: {} interfaces ({}), {} replicas × {} trials per stage, flux through the first {} /{}",
        f.interfaces.len(),
        if f.interfaces_automatic {
            "placed automatically"
        } else {
            "given"
        },
        f.replica_rates.len(),
        f.trials_per_stage,
        num(f.flux),
        u.t
    );
    let mut t = table();
    t.set_header(vec![
        format!("from ({})", u.l),
        format!("to ({})", u.l),
        "trials".to_string(),
        "successes".to_string(),
        "P(next | this)".to_string(),
    ]);
    for st in &f.stages {
        t.add_row(vec![
            num(st.from),
            num(st.to),
            st.trials.to_string(),
            st.successes.to_string(),
            num(st.probability),
        ]);
    }
    show(out, t);
}

/// The reactive-flux run: κ and its plateau.
fn sim_reactive_flux(out: &mut String, k: &crate::simulate::flux::FluxResult, u: &U) {
    let _ = writeln!(
        out,
        "reactive flux: {} trajectories from the barrier top, kappa = {} [{}, {}], plateau {} (window {} {}), exact TST {} /{}",
        k.trajectories,
        num(k.kappa),
        num(k.kappa_ci95[0]),
        num(k.kappa_ci95[1]),
        k.plateau_time
            .map(|t| format!("from t = {} {}", num(t), u.t))
            .unwrap_or_else(|| "not reached".into()),
        num(k.t_max),
        u.t,
        num(k.tst_exact),
        u.t
    );
}

/// Transitions counted between the wells of long trajectories.
fn sim_well_to_well(out: &mut String, w: &crate::simulate::transitions::TransitionResult, u: &U) {
    let _ = writeln!(
        out,
        "well-to-well (counted transitions, not the escape): {} trajectories × {} {}, {} forward and {} back; rate out of the reactant well {} /{}, out of the product well {} /{}\n  states: {}",
        w.trajectories,
        num(w.time_per_trajectory),
        u.t,
        w.forward,
        w.backward,
        with_ci(w.rate, w.rate_ci95),
        u.t,
        with_ci(w.rate_back, w.rate_back_ci95),
        u.t,
        w.rule
    );
}

/// Drift, D_eff and hops from long trajectories on a periodic landscape.
fn sim_periodic(out: &mut String, p: &crate::simulate::periodic::PeriodicSimResult, u: &U) {
    let _ = writeln!(
        out,
        "periodic landscape (long trajectories on the whole line): {} trajectories × {} blocks of {} {}; drift {} {}/{}, D_eff {} {}²/{}; hops out of the reactant well {} forward, {} back: k+ {} /{}, k− {} /{}",
        p.trajectories,
        p.blocks,
        num(p.block_time),
        u.t,
        with_ci(p.drift, p.drift_ci95),
        u.l,
        u.t,
        with_ci(p.effective_diffusion, p.effective_diffusion_ci95),
        u.l,
        u.t,
        p.hops_forward,
        p.hops_backward,
        with_ci(p.hop_forward, p.hop_forward_ci95),
        u.t,
        with_ci(p.hop_backward, p.hop_backward_ci95),
        u.t,
    );
}

/// The escape rate with its interval and how it was built.
fn sim_rate(out: &mut String, s: &super::SimulationResult, u: &U) {
    let _ = writeln!(
        out,
        "escape rate {} /{} [{}, {}] (95%: {}){}",
        num(s.rate),
        u.t,
        num(s.rate_ci95[0]),
        num(s.rate_ci95[1]),
        s.rate_ci_method,
        if s.force_rel_error > 0.0 {
            format!(
                "; force tabulated with relative error {:.1e}",
                s.force_rel_error
            )
        } else {
            String::new()
        }
    );
}

/// Renders `simulate`.
pub fn simulate(r: &super::SimulateReport) -> String {
    let mut out = String::new();
    let u = U::new(&r.units);
    header(&mut out, &r.header, &r.units);
    simulation(&mut out, &r.simulation, &u);
    out
}

/// Renders `compare`.
pub fn compare(r: &super::CompareReport) -> String {
    let mut out = rate(&r.theory);
    let u = U::new(&r.theory.units);
    out.push('\n');
    simulation(&mut out, &r.simulation, &u);
    let mut t = table();
    // one more column than the other tables: give it room
    t.set_width(140);
    t.set_header(vec![
        "method".to_string(),
        format!("rate (1/{})", u.t),
        "set against".to_string(),
        "ratio to simulation".to_string(),
        "ratio 95% interval".to_string(),
        "holds here".to_string(),
        "in sim. interval".to_string(),
        "within accuracy [allowed ratio]".to_string(),
    ]);
    let s = &r.simulation;
    t.add_row(vec![
        format!("simulated escape ({})", s.method),
        num(s.rate),
        "—".into(),
        "1".into(),
        "—".into(),
        "—".into(),
        "—".into(),
        "—".into(),
    ]);
    if let Some(w) = &s.well_to_well {
        t.add_row(vec![
            "simulated well-to-well (transitions)".to_string(),
            num(w.rate),
            "—".into(),
            "1".into(),
            "—".into(),
            "—".into(),
            "—".into(),
            "—".into(),
        ]);
    }
    for c in &r.comparison {
        t.add_row(comparison_cells(c, r));
    }
    show(&mut out, t);
    if let (Some(pt), Some(ps)) = (&r.theory.periodic, &s.periodic) {
        let mut t = table();
        t.set_header(vec![
            "periodic landscape".to_string(),
            "theory".to_string(),
            "simulated [95%]".to_string(),
            "theory/simulation [95%]".to_string(),
        ]);
        let ratio = |k: f64, v: f64, [lo, hi]: [f64; 2]| {
            if v > 0.0 && lo > 0.0 {
                format!("{} [{}, {}]", num(k / v), num(k / hi), num(k / lo))
            } else {
                "—".into()
            }
        };
        let mut line = |name: &str, k: Option<f64>, v: f64, ci: [f64; 2]| {
            t.add_row(vec![
                name.to_string(),
                opt(k),
                format!("{} [{}, {}]", num(v), num(ci[0]), num(ci[1])),
                k.map_or_else(|| "—".into(), |k| ratio(k, v, ci)),
            ]);
        };
        line(
            &format!("drift ({}/{}), exact overdamped", u.l, u.t),
            Some(pt.drift),
            ps.drift,
            ps.drift_ci95,
        );
        line(
            &format!("D_eff ({}²/{}), exact overdamped", u.l, u.t),
            pt.effective_diffusion,
            ps.effective_diffusion,
            ps.effective_diffusion_ci95,
        );
        if let Some(h) = &pt.hopping {
            let k = &h.kt;
            line(
                &format!("k+ (1/{}), exact overdamped", u.t),
                Some(k.forward),
                ps.hop_forward,
                ps.hop_forward_ci95,
            );
            line(
                &format!("k− (1/{}), exact overdamped", u.t),
                Some(k.backward),
                ps.hop_backward,
                ps.hop_backward_ci95,
            );
            if k.forward_kramers.is_some() {
                line(
                    &format!("k+ (1/{}), Kramers", u.t),
                    k.forward_kramers,
                    ps.hop_forward,
                    ps.hop_forward_ci95,
                );
                line(
                    &format!("k− (1/{}), Kramers", u.t),
                    k.backward_kramers,
                    ps.hop_backward,
                    ps.hop_backward_ci95,
                );
            }
        }
        show(&mut out, t);
    }
    let _ = writeln!(out, "verdict: {}", r.verdict);
    if let Some(o) = &r.observed {
        observed_block(&mut out, o, &u);
    }
    out
}

/// `compare --observed`: the observed rate, the simulated and every theory rate side by side.
fn observed_block(out: &mut String, o: &super::vs_observed::ObservedComparison, u: &U) {
    let core = |c: crate::observe::Interval| format!("[{}, {}]", num(c.lo), num(c.hi));
    let _ = writeln!(
        out,
        "\nobserved ({}): {} samples over {} {}; {} from core {} to core {} {} ({}); {} transition(s) in {} {} assigned to the core left",
        o.files.join(", "),
        o.samples,
        num(o.total_time),
        u.t,
        o.direction,
        core(o.core_from),
        core(o.core_to),
        u.l,
        o.core_rule,
        o.transitions,
        num(o.exposure),
        u.t
    );
    if let Some(k) = o.model_rate_to_core_edge {
        let _ = writeln!(
            out,
            "the model's exact overdamped 1/MFPT to the arrival core's near edge (what the observed rate measures): {} 1/{}",
            num(k),
            u.t
        );
    }
    let mut t = table();
    t.set_width(130);
    t.set_header(vec![
        "rate".to_string(),
        format!("rate (1/{})", u.t),
        "95% interval".to_string(),
        "ratio to observed [95%]".to_string(),
        "holds here".to_string(),
        "agrees with observed [allowed ratio]".to_string(),
    ]);
    let iv = |ci: Option<[f64; 2]>| {
        ci.map_or_else(|| "—".into(), |[a, b]| format!("[{}, {}]", num(a), num(b)))
    };
    let dash = || "—".to_string();
    t.add_row(vec![
        format!("observed {} ({} transitions)", o.direction, o.transitions),
        match (o.rate, o.upper95) {
            (Some(k), _) => num(k),
            (None, Some(up)) => format!("none (< {} at 95%)", num(up)),
            (None, None) => "none".into(),
        },
        iv(o.rate_ci95),
        "1".into(),
        dash(),
        dash(),
    ]);
    if let Some(s) = &o.simulation {
        let ratio = match o.rate_ci95 {
            Some([lo, hi]) => format!(
                "{} [{}, {}]",
                num(s.ratio_to_observed),
                num(s.rate_ci95[0] / hi),
                num(s.rate_ci95[1] / lo)
            ),
            None => num(s.ratio_to_observed),
        };
        t.add_row(vec![
            format!("simulated {} (the model)", s.against),
            num(s.rate),
            iv(Some(s.rate_ci95)),
            ratio,
            dash(),
            format!("{} (z = {:.2})", if s.agrees { "yes" } else { "no" }, s.z),
        ]);
    }
    for c in o.theories.iter().filter(|c| c.rate.is_some()) {
        let ratio = match (c.ratio_to_observed, c.ratio_ci95) {
            (Some(q), Some([a, b])) => format!("{} [{}, {}]", num(q), num(a), num(b)),
            _ => "n/a".into(),
        };
        t.add_row(vec![
            c.label.to_string(),
            opt(c.rate),
            c.rate_ci95.map_or_else(
                || "— (no sigma_U)".into(),
                |ci| format!("{} (σ_U)", iv(Some(ci))),
            ),
            ratio,
            if c.valid { "yes" } else { "no" }.into(),
            format!(
                "{} [{}, {}]",
                if c.consistent { "yes" } else { "no" },
                num(c.accuracy_band.0),
                c.accuracy_band.1.map_or_else(|| "∞".into(), num)
            ),
        ]);
    }
    show(out, t);
    for w in &o.warnings {
        let _ = writeln!(out, "warning (observed): {w}");
    }
    let _ = writeln!(out, "observed verdict: {}", o.verdict);
}

/// One row of the comparison table. A row with nothing to compare (no rate, or no simulated rate
/// to set it against) says so in every column, with the reason.
fn comparison_cells(c: &super::ComparisonRow, r: &super::CompareReport) -> Vec<String> {
    let na = || "n/a".to_string();
    let holds = if c.valid { "yes" } else { "no" }.to_string();
    let Some(k) = c.rate else {
        let why = r
            .theory
            .formulas
            .iter()
            .find(|f| f.key == c.method)
            .map_or("no rate here", |f| f.note.as_str());
        return vec![
            c.label.to_string(),
            "n/a (no rate)".into(),
            format!("nothing: {why}"),
            na(),
            na(),
            holds,
            na(),
            na(),
        ];
    };
    if c.against == "none" {
        return vec![
            c.label.to_string(),
            num(k),
            "nothing: no transitions counted (simulation.well_to_well = true counts them)".into(),
            na(),
            na(),
            holds,
            na(),
            na(),
        ];
    }
    let (ratio, ci) = match (c.ratio_to_simulation, c.ratio_ci95) {
        (Some(q), Some([a, b])) => (num(q), format!("[{}, {}]", num(a), num(b))),
        (Some(q), None) => (num(q), "n/a (open simulated interval)".into()),
        _ => (
            "n/a (no simulated escape)".into(),
            "n/a (no simulated escape)".into(),
        ),
    };
    vec![
        c.label.to_string(),
        num(k),
        c.against.to_string(),
        ratio,
        ci,
        holds,
        if c.agrees { "yes" } else { "no" }.into(),
        format!(
            "{} [{}, {}]",
            if c.consistent { "yes" } else { "no" },
            num(c.accuracy_band.0),
            c.accuracy_band.1.map_or_else(|| "∞".into(), num)
        ),
    ]
}

/// Renders `merge` (times in the run's time unit).
pub fn merge(r: &super::MergeReport) -> String {
    let s = &r.summary;
    let t_unit = match r.time_unit.as_deref() {
        Some("1") => "τ",
        Some(u) => u,
        None => "time unit of the run",
    };
    let mut out = String::new();
    let _ = writeln!(
        out,
        "merged records: {} of {} trajectories (run {}, seed {}, dt = {} {t_unit})",
        r.recorded,
        r.trajectories,
        r.fingerprint,
        r.seed,
        num(r.dt)
    );
    let mut t = table();
    t.set_header(vec![
        "escaped".to_string(),
        "censored".to_string(),
        format!("rate (1/{t_unit})"),
        "95% interval".to_string(),
        format!("MFPT ± se ({t_unit})"),
        format!("median ({t_unit})"),
    ]);
    t.add_row(vec![
        s.escaped.to_string(),
        s.censored.to_string(),
        num(s.rate),
        format!("[{}, {}]", num(s.rate_ci95[0]), num(s.rate_ci95[1])),
        match (s.mfpt, s.mfpt_se) {
            (Some(m), Some(e)) => format!("{} ± {}", num(m), num(e)),
            _ => "—".into(),
        },
        opt(s.median),
    ]);
    show(&mut out, t);
    warnings(&mut out, &r.warnings);
    out
}

/// Short heading with units for the scanned value.
fn value_heading(r: &crate::scan::ScanReport, u: &U) -> String {
    match r.key.as_str() {
        "particle.friction" => format!("γ (1/{})", u.t),
        "particle.diffusion" => format!("D ({}²/{})", u.l, u.t),
        "particle.mass" => "m".into(),
        "units.temperature" => "T (K)".into(),
        "potential.tilt" => format!("F ({}/{})", u.e, u.l),
        // the last part of the key; the line above the table names all of it
        k => k.rsplit('.').next().unwrap_or(k).to_string(),
    }
}

/// Renders `scan`: by default the scanned value, each rate that holds somewhere (shown where it
/// holds), periodic drift and diffusion, and the simulated rates, in 100 columns; `all` adds the
/// regime, E_b/kT and every rate at every point. Numbers have three significant digits (the
/// CSV and JSON keep every digit).
pub fn scan(r: &crate::scan::ScanReport, all: bool) -> String {
    use crate::theory::catalogue::{CATALOGUE, Formula};
    let u = U::new(&r.units);
    let mut out = String::new();
    let _ = writeln!(
        out,
        "scan of {} over {} points ({:?} scan)",
        r.key,
        r.points.len(),
        r.kind
    );
    let mut t = table();
    t.set_width(if all { 160 } else { 100 });
    let mut head = vec![value_heading(r, &u)];
    if all {
        head.push("regime".into());
        head.push("E_b/kT".into());
    }
    let formulas: Vec<&Formula> = CATALOGUE
        .iter()
        .filter(|f| {
            r.points
                .iter()
                .any(|p| p.rates[f.key].is_some() && (all || p.holds.contains(&f.key)))
        })
        .collect();
    for f in &formulas {
        head.push(format!("{} (1/{})", f.heading, u.t));
    }
    let per = r.points.iter().any(|p| p.periodic.is_some());
    if per {
        head.push(format!("drift ({}/{})", u.l, u.t));
        head.push(format!("D_eff ({}²/{})", u.l, u.t));
        head.push(format!("k+ / k− (1/{})", u.t));
    }
    let sims: Vec<&crate::scan::SimPoint> = r
        .points
        .iter()
        .filter_map(|p| p.simulation.as_ref())
        .collect();
    // a column when anything was simulated, or meant to be (an interrupted scan)
    let sim = r.points.iter().any(|p| p.simulation_status.is_some()) || !sims.is_empty();
    if sim {
        head.push(format!("sim. (1/{})", u.t));
    }
    let sim_ww = sims.iter().any(|s| s.well_to_well.is_some());
    if sim_ww {
        head.push(format!("sim. well to well (1/{})", u.t));
    }
    let sim_per = sims.iter().any(|s| s.periodic.is_some());
    if sim_per {
        head.push(format!("sim. drift ({}/{})", u.l, u.t));
        head.push(format!("sim. D_eff ({}²/{})", u.l, u.t));
    }
    t.set_header(head);
    let dash = || "—".to_string();
    let iv_or = |v: Option<f64>, ci: Option<[f64; 2]>| match (v, ci) {
        (Some(v), Some(c)) => short_iv(v, c),
        (Some(v), None) => short(v),
        _ => dash(),
    };
    let mut hidden = false;
    let values: Vec<f64> = r.points.iter().map(|p| p.value).collect();
    for (p, value) in r.points.iter().zip(scan_values(&values)) {
        let mut row = vec![value];
        if all {
            row.push(p.regime.to_string());
            row.push(short(p.barrier_height_kt));
        }
        for k in formulas.iter().map(|f| f.key) {
            let ci = p
                .uncertainty
                .as_ref()
                .and_then(|v| v.iter().find(|i| i.key == k.as_str()))
                .map(|i| i.ci95);
            let v = p.rates[k];
            if all || p.holds.contains(&k) {
                row.push(iv_or(v, ci));
            } else {
                hidden |= v.is_some();
                row.push(dash());
            }
        }
        if per {
            let q = p.periodic.as_ref();
            row.push(q.map_or_else(dash, |q| short(q.drift)));
            row.push(
                q.and_then(|q| q.effective_diffusion)
                    .map_or_else(dash, short),
            );
            row.push(q.map_or_else(dash, |q| {
                let o = |v: Option<f64>| v.map_or_else(dash, short);
                format!("{} / {}", o(q.hop_forward), o(q.hop_backward))
            }));
        }
        let s = p.simulation.as_ref();
        if sim {
            row.push(s.map_or_else(
                || {
                    p.simulation_status
                        .filter(|s| *s == crate::scan::SimStatus::Interrupted)
                        .map_or("—", |s| s.as_str())
                        .into()
                },
                |s| short_iv(s.rate, s.rate_ci95),
            ));
        }
        if sim_ww {
            row.push(iv_or(
                s.and_then(|s| s.well_to_well),
                s.and_then(|s| s.well_to_well_ci95),
            ));
        }
        if sim_per {
            let q = s.and_then(|s| s.periodic.as_ref());
            row.push(q.map_or_else(dash, |q| iv_or(Some(q.drift), q.drift_ci95)));
            row.push(q.map_or_else(dash, |q| {
                iv_or(q.effective_diffusion, q.effective_diffusion_ci95)
            }));
        }
        t.add_row(row);
    }
    show(&mut out, t);
    if r.points.iter().any(|p| p.uncertainty.is_some()) {
        let _ = writeln!(
            out,
            "rates with an interval: 95% interval from the profile's sigma_U"
        );
    }
    scan_legend(&mut out, &sims, hidden, formulas.is_empty() && !all);
    scan_fits(&mut out, r, &u);
    for n in &r.notes {
        let _ = writeln!(out, "note: {n}");
    }
    out
}

/// What the scan table's marks mean: the simulation methods used, hidden rates, no rate holding.
fn scan_legend(out: &mut String, sims: &[&crate::scan::SimPoint], hidden: bool, none_hold: bool) {
    if !sims.is_empty() {
        let mut methods: Vec<(&str, usize)> = Vec::new();
        for s in sims {
            match methods.iter_mut().find(|(m, _)| *m == s.method) {
                Some(e) => e.1 += 1,
                None => methods.push((s.method, 1)),
            }
        }
        let m: Vec<String> = methods
            .iter()
            .map(|(m, n)| format!("{m} at {n} point{}", if *n == 1 { "" } else { "s" }))
            .collect();
        let _ = writeln!(
            out,
            "sim.: simulated rates with their 95% intervals; escape rate by {}",
            m.join(", ")
        );
    }
    if hidden {
        let _ = writeln!(
            out,
            "—: the formula does not hold at that point (--all-columns shows every rate everywhere)"
        );
    } else if none_hold {
        let _ = writeln!(
            out,
            "no rate formula holds at any point of this scan (--all-columns shows them all)"
        );
    }
}

/// The fits of a scan (apparent activation energy, or distance to the barrier), as a table.
fn scan_fits(out: &mut String, r: &crate::scan::ScanReport, u: &U) {
    if !r.fits.is_empty() {
        let (what, unit, pre) = match r.kind {
            crate::scan::Kind::Temperature => ("apparent E_a", u.e.to_string(), "prefactor A"),
            _ => ("distance x‡", u.l.to_string(), "k(F = 0)"),
        };
        let mut f = table();
        f.set_header(vec![
            "rate".to_string(),
            format!("{what} ({unit})"),
            "95% interval".to_string(),
            format!("{pre} (1/{})", u.t),
            "95% interval".to_string(),
        ]);
        for fit in &r.fits {
            f.add_row(vec![
                fit.rate.clone(),
                num(fit.value),
                format!("[{}, {}]", num(fit.value_ci95[0]), num(fit.value_ci95[1])),
                num(fit.prefactor),
                format!(
                    "[{}, {}]",
                    num(fit.prefactor_ci95[0]),
                    num(fit.prefactor_ci95[1])
                ),
            ]);
        }
        show(out, f);
    }
}

/// Renders `observe`: trajectories, correlation time, profile, cores and rates, warnings.
pub fn observe(r: &super::observe::ObserveReport) -> String {
    let mut out = String::new();
    let u = U::new(&r.units);
    let o = &r.observed;
    match &r.scenario {
        Some(s) => {
            let _ = writeln!(
                out,
                "observed trajectories · units of scenario {s}: positions in {}, times in {}, energies in {}{}",
                u.l,
                u.t,
                u.e,
                if u.e == "kT" {
                    String::new()
                } else {
                    format!(" (kT = {} {})", num(r.kt), u.e)
                }
            );
        }
        None => {
            let _ = writeln!(
                out,
                "observed trajectories · reduced units: positions (L) and times (τ) as in the files, energies in kT (give --scenario for physical units)"
            );
        }
    }
    let mut t = table();
    t.set_header(vec![
        "trajectory".to_string(),
        "samples".to_string(),
        format!("sampling interval ({})", u.t),
        format!("duration ({})", u.t),
    ]);
    for f in &o.trajectories {
        t.add_row(vec![
            f.name.clone(),
            f.samples.to_string(),
            num(f.dt),
            num(f.duration),
        ]);
    }
    show(&mut out, t);
    let p = &o.position;
    let _ = writeln!(
        out,
        "{} samples over {} {}; position from {} to {} {}, mean {} ± sd {}",
        o.samples,
        num(o.total_time),
        u.t,
        num(p.min),
        num(p.max),
        u.l,
        num(p.mean),
        num(p.sd)
    );
    let c = &o.correlation;
    // τ_int in time only when every trajectory has the same sampling interval
    let dt0 = o.trajectories.first().map_or(f64::NAN, |f| f.dt);
    let same_dt = o
        .trajectories
        .iter()
        .all(|f| (f.dt - dt0).abs() <= 1e-9 * dt0.abs());
    let in_time = |samples: f64| {
        if same_dt {
            format!(" = {} {}", num(samples * dt0), u.t)
        } else {
            String::new()
        }
    };
    let _ = writeln!(
        out,
        "integrated autocorrelation time of the position: τ_int = {} samples{} (summed over a window of {} samples{}){}",
        num(c.tau_int),
        in_time(c.tau_int),
        num(c.window),
        in_time(c.window),
        if c.converged {
            ""
        } else {
            "; the window did not close: a lower bound"
        }
    );
    let fe = &o.free_energy;
    if let Some(s) = &r.profile {
        let _ = writeln!(
            out,
            "free energy U = −kT ln p(x): {} bins of {} {} from {} to {} {}, spanning {} {}; σ_U by block bootstrap ({} blocks of {} samples, {} resamples)",
            s.bins,
            num(s.bin_width),
            u.l,
            num(s.x_min),
            num(s.x_max),
            u.l,
            num(s.u_range),
            u.e,
            fe.blocks,
            fe.block_samples,
            fe.resamples
        );
        if let Some(b) = &s.barrier {
            let side = |name: &str, d: &super::observe::BarrierSide| {
                let sigma = d
                    .sigma_kt
                    .map_or(String::new(), |e| format!(" ± {}", num(r.kt * e)));
                format!(
                    "{}{sigma} {} above the lowest bin of {name} (x = {} {})",
                    num(d.height),
                    u.e,
                    num(d.minimum),
                    u.l
                )
            };
            let _ = writeln!(
                out,
                "barrier between the cores (histogram, highest bin at x = {} {}): {}; {}{}",
                num(b.x),
                u.l,
                side("A", &b.from_a),
                side("B", &b.from_b),
                if b.complete {
                    ""
                } else {
                    "; some bins between the cores were never visited, so the barrier is higher"
                }
            );
        }
    }
    let k = &o.kinetics;
    let _ = writeln!(
        out,
        "cores: A [{}, {}] {}, B [{}, {}] {} ({})",
        num(k.core_a.lo),
        num(k.core_a.hi),
        u.l,
        num(k.core_b.lo),
        num(k.core_b.hi),
        u.l,
        k.core_rule
    );
    let mut t = table();
    t.set_header(vec![
        "transition".to_string(),
        "count".to_string(),
        format!("time in the core left ({})", u.t),
        format!("rate (1/{})", u.t),
        "95% interval".to_string(),
    ]);
    for (name, rate) in [("A → B", &k.forward), ("B → A", &k.backward)] {
        let (value, interval) = match (rate.rate, rate.ci95, rate.upper95) {
            (Some(v), Some(ci), _) => (num(v), format!("[{}, {}]", num(ci[0]), num(ci[1]))),
            (_, _, Some(up)) => ("none".to_string(), format!("below {}", num(up))),
            _ => ("—".to_string(), "—".to_string()),
        };
        t.add_row(vec![
            name.to_string(),
            rate.transitions.to_string(),
            num(rate.exposure),
            value,
            interval,
        ]);
    }
    show(&mut out, t);
    let mut t = table();
    t.set_header(vec![
        "dwell in".to_string(),
        "complete periods".to_string(),
        format!("mean ({})", u.t),
        "CV (1 if exponential)".to_string(),
        "KS p-value (exponential)".to_string(),
    ]);
    for (name, d) in [("A", &k.dwell_a), ("B", &k.dwell_b)] {
        t.add_row(vec![
            name.to_string(),
            d.count.to_string(),
            opt(d.mean),
            opt(d.cv),
            opt(d.ks_p_value),
        ]);
    }
    show(&mut out, t);
    let b = &k.boundary;
    let spread = |s: Option<f64>| s.map_or_else(|| "—".into(), |v| format!("{:.0}%", 100.0 * v));
    let _ = writeln!(
        out,
        "core edges moved by {} {} (cores as placed | shrunk | grown): k_AB {} | {} | {} (spread {}), k_BA {} | {} | {} (spread {})",
        num(b.shift),
        u.l,
        opt(b.forward[0]),
        opt(b.forward[1]),
        opt(b.forward[2]),
        spread(b.forward_spread),
        opt(b.backward[0]),
        opt(b.backward[1]),
        opt(b.backward[2]),
        spread(b.backward_spread)
    );
    if let Some(d) = &o.diffusion {
        observe_diffusion(&mut out, r, d, &u);
    }
    if let Some(f) = &o.friction {
        observe_friction(&mut out, r, f, &u);
    }
    let w = &r.written;
    for (what, file) in [("profile table", &w.profile), ("scenario", &w.scenario)] {
        if let Some(f) = file {
            let _ = writeln!(out, "wrote the {what} {f}");
        }
    }
    if let Some(g) = &r.regime {
        let _ = writeln!(
            out,
            "regime with the observed friction (the written scenario, as `rate` reads it): {}{}{}",
            g.name.as_str(),
            g.gamma_over_omega_barrier
                .map_or(String::new(), |v| format!(", γ/ω_b = {}", num(v))),
            g.delta
                .map_or(String::new(), |v| format!(", δ = {}", num(v)))
        );
    }
    for n in &r.notes {
        let _ = writeln!(out, "note: {n}");
    }
    warnings(&mut out, &o.warnings);
    out
}

/// The friction part of `observe`: mass, ⟨v²⟩, Green–Kubo D, γ by its route, the memory fit, the
/// velocities' error (the VACF and the kernel points are in the JSON).
fn observe_friction(
    out: &mut String,
    r: &super::observe::ObserveReport,
    f: &crate::observe::velocity::Friction,
    u: &U,
) {
    use crate::observe::velocity::{Estimate, Origin, Route};
    let mass_unit = if r.units.mass == "1" {
        format!("{}·{}²/{}²", u.e, u.t, u.l)
    } else {
        r.units.mass.clone()
    };
    let est = |e: &Estimate| format!("{} ± {}", num(e.value), num(e.se));
    let iv = |e: &Estimate| format!("[{}, {}]", num(e.ci95[0]), num(e.ci95[1]));
    let _ = writeln!(
        out,
        "friction from {} velocities ({} samples every {} {}; block bootstrap, {} blocks, {} resamples):",
        match f.origin {
            Origin::Given => "the given",
            Origin::CentralDifference => "central-difference",
        },
        f.samples,
        num(f.interval),
        u.t,
        f.blocks,
        f.resamples
    );
    let mut t = table();
    t.set_header(vec![
        "quantity".to_string(),
        "value ± se".to_string(),
        "95% interval".to_string(),
        "how".to_string(),
    ]);
    t.add_row(vec![
        format!("mass ({mass_unit})"),
        est(&f.mass),
        iv(&f.mass),
        if f.mass_given {
            "given".into()
        } else {
            "equipartition kT/⟨v²⟩".into()
        },
    ]);
    t.add_row(vec![
        format!("⟨v²⟩ ({}²/{}²)", u.l, u.t),
        est(&f.v2),
        iv(&f.v2),
        "mean square velocity".into(),
    ]);
    t.add_row(vec![
        format!("D ({}²/{})", u.l, u.t),
        est(&f.diffusion),
        iv(&f.diffusion),
        format!(
            "Green–Kubo ∫C_v over {} lags = {} {}{}",
            f.window.lags,
            num(f.window.time),
            u.t,
            match (f.confined, &f.force) {
                (true, Some(_)) => "; cut by the mean force",
                (true, None) => "; vanishes: confined",
                _ => "",
            }
        ),
    ]);
    if let Some(force) = &f.force {
        t.add_row(vec![
            "force share φ".into(),
            est(&force.share),
            iv(&force.share),
            format!(
                "∫⟨U′(x(t)) v(0)⟩dt/(m⟨v²⟩) over the window; Green–Kubo while φ ≤ {}",
                crate::observe::velocity::FREE_SHARE
            ),
        ]);
    }
    let kernel_how = |r: Route| match r {
        Route::KernelFit => "memory-kernel fit",
        _ => "memoryless −ln(1 − AΔt)/Δt of the kernel's spike area A",
    };
    let with_force = if f.kernel.force_term {
        ", observed mean force"
    } else {
        ""
    };
    t.add_row(vec![
        format!("γ (1/{})", u.t),
        est(&f.gamma),
        iv(&f.gamma),
        match f.gamma_route {
            Route::GreenKubo => "used: Green–Kubo, Einstein kT/(m D)".into(),
            r => format!("used: {}{with_force}", kernel_how(r)),
        },
    ]);
    // the other route beside it
    match (f.gamma_route, &f.gamma_kernel) {
        (Route::GreenKubo, Some(k)) => t.add_row(vec![
            format!("γ, kernel (1/{})", u.t),
            est(k),
            iv(k),
            format!(
                "{}{with_force}",
                kernel_how(if f.kernel.fit.is_some() {
                    Route::KernelFit
                } else {
                    Route::KernelArea
                })
            ),
        ]),
        (Route::GreenKubo, None) => &mut t,
        _ => t.add_row(vec![
            format!("γ, Green–Kubo (1/{})", u.t),
            est(&f.gamma_green_kubo),
            iv(&f.gamma_green_kubo),
            match &f.force {
                Some(force) => format!(
                    "not used: the well's force makes it high by about 1/(1 − φ) = {}",
                    num(1.0 / (1.0 - force.share.value))
                ),
                None => "not used: the particle is confined".into(),
            },
        ]),
    };
    if let Some(k) = &f.kernel.fit {
        t.add_row(vec![
            format!("kernel γ (1/{})", u.t),
            est(&k.gamma),
            iv(&k.gamma),
            format!("exponential fit to {} kernel lags", k.points),
        ]);
        t.add_row(vec![
            format!("memory time τ ({})", u.t),
            est(&k.memory_time),
            iv(&k.memory_time),
            "K(t) = (γ/τ) e^(−t/τ)".into(),
        ]);
    }
    show(out, t);
    if f.kernel.fit.is_none() {
        let _ = writeln!(
            out,
            "memory kernel: memoryless at this sampling (no lag after 0 resolved: the memory time is below about {} {})",
            num(f.interval),
            u.t
        );
    }
    let _ = match f.fd_bias {
        Some(b) => writeln!(
            out,
            "velocity error: {} (here f(2γΔt) − 1 = {:.2}%)",
            f.velocity_error,
            100.0 * b
        ),
        None => writeln!(out, "velocity error: {}", f.velocity_error),
    };
}

/// `observe --spring`: D at each restrained window's mean position.
pub fn observe_windows(r: &super::observe::WindowsReport) -> String {
    let mut out = String::new();
    let u = U::new(&r.units);
    let _ = writeln!(
        out,
        "restrained windows · {}: positions in {}, times in {}, springs in {}/{}²; D = var²/∫C at each window's mean (Woolf & Roux 1994, Hummer 2005), 95% interval by batch means; 1/k (k in kT/{}²) is the variance a flat free energy gives",
        match &r.scenario {
            Some(s) => format!("units of scenario {s}"),
            None => "reduced units".to_string(),
        },
        u.l,
        u.t,
        u.e,
        u.l,
        u.l
    );
    let mut t = table();
    t.set_header(vec![
        "window".to_string(),
        "samples".to_string(),
        format!("spring ({}/{}²)", u.e, u.l),
        format!("mean x ({})", u.l),
        format!("var x ({}²)", u.l),
        format!("1/k ({}²)", u.l),
        format!("D ({}²/{})", u.l, u.t),
        "95% interval".to_string(),
    ]);
    for w in &r.windows {
        let d = &w.window.diffusion;
        t.add_row(vec![
            w.window.trajectory.name.clone(),
            w.window.trajectory.samples.to_string(),
            num(w.spring),
            num(d.mean),
            format!("{} ± {}", num(d.variance), num(d.variance_se)),
            num(d.variance_flat),
            format!("{} ± {}", num(d.d), num(d.d_se)),
            format!("[{}, {}]", num(d.d_ci95[0]), num(d.d_ci95[1])),
        ]);
    }
    show(&mut out, t);
    for n in &r.notes {
        let _ = writeln!(out, "note: {n}");
    }
    warnings(&mut out, &r.warnings);
    out
}

/// The D(x) part of `observe`: every third interface and those nearest the wells and the barrier
/// (all of them are in the JSON).
fn observe_diffusion(
    out: &mut String,
    r: &super::observe::ObserveReport,
    d: &crate::observe::counts::Diffusion,
    u: &U,
) {
    let unit = format!("{}²/{}", u.l, u.t);
    let b = &d.bins;
    let _ = writeln!(
        out,
        "D(x) by the Bayesian propagator (Hummer 2005): {} bins of {} {} over [{}, {}] {}, {}; posterior median and 95% interval at lag {} frames = {} {}, {}",
        b.count,
        num(b.width()),
        u.l,
        num(b.lo),
        num(b.hi),
        u.l,
        d.range_rule,
        d.lag_frames,
        num(d.lag_time),
        u.t,
        d.lag_rule
    );
    let rows = &d.interfaces;
    let nearest = |x: f64| {
        (0..rows.len()).min_by(|&i, &j| (rows[i].x - x).abs().total_cmp(&(rows[j].x - x).abs()))
    };
    let mut marks: Vec<(usize, &str)> = Vec::new();
    if let Some(bar) = r.profile.as_ref().and_then(|p| p.barrier.as_ref()) {
        for (x, name) in [
            (bar.from_a.minimum, "well A"),
            (bar.x, "barrier"),
            (bar.from_b.minimum, "well B"),
        ] {
            marks.extend(nearest(x).map(|i| (i, name)));
        }
    }
    let mut t = table();
    t.set_header(vec![
        format!("x ({})", u.l),
        String::new(),
        format!("D ({unit})"),
        "95% interval".to_string(),
        format!("conditional moments D ({unit}) ± se"),
    ]);
    for (i, row) in rows.iter().enumerate() {
        let mark = marks.iter().find(|m| m.0 == i).map(|m| m.1);
        if mark.is_none() && i % 3 != 1 {
            continue;
        }
        let moments = match (row.moments_d, row.moments_se) {
            (Some(v), Some(se)) => format!("{} ± {}", num(v), num(se)),
            _ => "—".to_string(),
        };
        t.add_row(vec![
            num(row.x),
            mark.unwrap_or("").to_string(),
            num(row.d),
            format!("[{}, {}]", num(row.ci95[0]), num(row.ci95[1])),
            moments,
        ]);
    }
    show(out, t);
    let s = &d.scan;
    let lags: Vec<String> = s.fits.iter().map(|f| f.lag_frames.to_string()).collect();
    let _ = writeln!(
        out,
        "lag scan over {} frames: the median D changes across lags by at most {:.0}% of its mean{}",
        lags.join(", "),
        100.0 * s.max_relative_spread,
        if s.warning.is_some() {
            " (see the warning)"
        } else {
            ", within the intervals everywhere"
        }
    );
    for n in &d.notes {
        let _ = writeln!(out, "note: {n}");
    }
}
