//! Plain-text renderer for people: comfy-table tables with the units in the column headings.

use super::{Header, LandscapeOut, RateReport, SurveyReport};
use crate::units::UnitNames;
use comfy_table::{Cell, ContentArrangement, Table, presets::UTF8_FULL_CONDENSED};
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
    let _ = writeln!(out, "{t}");
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
    let _ = writeln!(out, "{s}");
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
    let _ = writeln!(out, "{t}");
    let _ = writeln!(
        out,
        "exact overdamped MFPT reactant → target: {} {}",
        num(r.mfpt_time),
        u.t
    );
    if !reg.trusted.is_empty() {
        let _ = writeln!(out, "trust here: {}", reg.trusted.join(", "));
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
            .find(|r| r.key == i.key)
            .map_or(i.key, |r| r.label);
        t.add_row(vec![
            format!("{label} (1/{})", u.t),
            num(i.central),
            num(i.median),
            iv(i.ci68),
            iv(i.ci95),
        ]);
    }
    let _ = writeln!(out, "{t}");
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
    let _ = writeln!(out, "{t}");
}

fn simulation(out: &mut String, s: &super::SimulationOut, u: &U) {
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
    if let (Some(esc), Some(cen)) = (s.escaped, s.censored) {
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
        let _ = writeln!(out, "{t}");
    }
    if let Some(f) = &s.ffs {
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
        let _ = writeln!(out, "{t}");
    }
    if let Some(k) = &s.reactive_flux {
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
    if let Some(w) = &s.well_to_well {
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
    if let Some(p) = &s.periodic {
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
    warnings(out, &s.warnings);
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
        t.add_row(vec![
            c.label.to_string(),
            opt(c.rate),
            match c.against {
                "none" => "— (not counted)".to_string(),
                a => a.to_string(),
            },
            opt(c.ratio_to_simulation),
            c.ratio_ci95
                .map(|[a, b]| format!("[{}, {}]", num(a), num(b)))
                .unwrap_or_else(|| "—".into()),
            if c.valid { "yes" } else { "no" }.into(),
            if c.agrees { "yes" } else { "no" }.into(),
            format!(
                "{} [{}, {}]",
                if c.consistent { "yes" } else { "no" },
                num(c.accuracy_band.0),
                c.accuracy_band.1.map_or_else(|| "∞".into(), num)
            ),
        ]);
    }
    let _ = writeln!(out, "{t}");
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
        let _ = writeln!(out, "{t}");
    }
    let _ = writeln!(out, "verdict: {}", r.verdict);
    out
}

/// Renders `merge` (times in the run's time unit).
pub fn merge(r: &super::MergeReport) -> String {
    let s = &r.summary;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "merged records: {} of {} trajectories (run {}, seed {}, dt = {})",
        r.recorded,
        r.trajectories,
        r.fingerprint,
        r.seed,
        num(r.dt)
    );
    let mut t = table();
    t.set_header(vec![
        "escaped",
        "censored",
        "rate",
        "95% interval",
        "MFPT ± se",
        "median",
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
    let _ = writeln!(out, "{t}");
    warnings(&mut out, &r.warnings);
    out
}

/// Renders `scan`.
pub fn scan(r: &crate::scan::ScanReport) -> String {
    use crate::scan::{RATE_KEYS, rate_of};
    let u = U::new(&r.units);
    let mut out = String::new();
    let _ = writeln!(
        out,
        "scan of {} over {} points ({:?} scan)",
        r.key,
        r.points.len(),
        r.kind
    );
    // a scan row carries every rate: give it more room than the other tables
    let mut t = table();
    t.set_width(160);
    let mut head = vec![r.key.clone(), "regime".into(), "E_b/kT".into()];
    let present: Vec<&str> = RATE_KEYS
        .iter()
        .copied()
        .filter(|k| r.points.iter().any(|p| rate_of(&p.rates, k).is_some()))
        .collect();
    for k in &present {
        head.push(format!("{k} (1/{})", u.t));
    }
    let unc = r.points.iter().any(|p| p.uncertainty.is_some());
    if unc {
        head.push(format!("1/MFPT 95% from σ_U (1/{})", u.t));
    }
    let per = r.points.iter().any(|p| p.periodic.is_some());
    if per {
        head.push(format!("drift ({}/{})", u.l, u.t));
        head.push(format!("D_eff ({}²/{})", u.l, u.t));
        head.push(format!("k+ / k− (1/{})", u.t));
    }
    let sim = r.points.iter().any(|p| p.simulation.is_some());
    if sim {
        head.push(format!("simulated escape (1/{}) [95%]", u.t));
    }
    let sim_ww = r.points.iter().any(|p| {
        p.simulation
            .as_ref()
            .is_some_and(|s| s.well_to_well.is_some())
    });
    if sim_ww {
        head.push(format!("simulated well-to-well (1/{}) [95%]", u.t));
    }
    let sim_per = r
        .points
        .iter()
        .any(|p| p.simulation.as_ref().is_some_and(|s| s.periodic.is_some()));
    if sim_per {
        head.push("simulated drift, D_eff [95%]".to_string());
    }
    t.set_header(head);
    let iv = |v: Option<[f64; 2]>| {
        v.map_or_else(|| "—".into(), |[a, b]| format!("[{}, {}]", num(a), num(b)))
    };
    for p in &r.points {
        let mut row = vec![num(p.value), p.regime.to_string(), num(p.barrier_height_kt)];
        for k in &present {
            row.push(opt(rate_of(&p.rates, k)));
        }
        if unc {
            row.push(iv(p
                .uncertainty
                .as_ref()
                .and_then(|v| v.iter().find(|i| i.key == "mfpt"))
                .map(|i| i.ci95)));
        }
        if per {
            let q = p.periodic.as_ref();
            row.push(q.map_or_else(|| "—".into(), |q| num(q.drift)));
            row.push(opt(q.and_then(|q| q.effective_diffusion)));
            row.push(q.map_or_else(
                || "—".into(),
                |q| format!("{} / {}", opt(q.hop_forward), opt(q.hop_backward)),
            ));
        }
        if sim {
            row.push(p.simulation.as_ref().map_or_else(
                || "—".into(),
                |s| {
                    format!(
                        "{} [{}, {}] ({})",
                        num(s.rate),
                        num(s.rate_ci95[0]),
                        num(s.rate_ci95[1]),
                        s.method
                    )
                },
            ));
        }
        if sim_ww {
            let s = p.simulation.as_ref();
            row.push(iv(s.and_then(|s| s.well_to_well_ci95)).replacen(
                '[',
                &format!("{} [", opt(s.and_then(|s| s.well_to_well))),
                1,
            ));
        }
        if sim_per {
            let q = p.simulation.as_ref().and_then(|s| s.periodic.as_ref());
            row.push(q.map_or_else(
                || "—".into(),
                |q| {
                    format!(
                        "{} {}, {} {}",
                        num(q.drift),
                        iv(q.drift_ci95),
                        opt(q.effective_diffusion),
                        iv(q.effective_diffusion_ci95)
                    )
                },
            ));
        }
        t.add_row(row);
    }
    let _ = writeln!(out, "{t}");
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
        let _ = writeln!(out, "{f}");
    }
    for n in &r.notes {
        let _ = writeln!(out, "note: {n}");
    }
    out
}
