//! CSV renderer for scans: one row per point, rates per the scenario's time unit; an empty field
//! where a rate does not apply. Floats are written in Rust's shortest round-trip form, so a value
//! read back is bit-identical to what `rate --json` prints for the same point.

use crate::scan::ScanReport;
use crate::theory::catalogue::CATALOGUE;
use std::fmt::Write;

fn f(v: Option<f64>) -> String {
    v.map(|x| format!("{x:?}")).unwrap_or_default()
}

/// CSV text of a scan.
pub fn scan(r: &ScanReport) -> String {
    let mut out = String::new();
    let _ = write!(
        out,
        "{},regime,gamma_over_omega_barrier,delta,barrier_height_kT",
        r.key
    );
    for k in CATALOGUE.iter().map(|f| f.key) {
        let _ = write!(out, ",{k}");
    }
    let unc = r.points.iter().any(|p| p.uncertainty.is_some());
    if unc {
        for k in CATALOGUE.iter().map(|f| f.key) {
            let _ = write!(out, ",{k}_lo95,{k}_hi95");
        }
    }
    let per = r.points.iter().any(|p| p.periodic.is_some());
    if per {
        let _ = write!(out, ",drift,effective_diffusion,hop_forward,hop_backward");
    }
    let _ = write!(
        out,
        ",simulation_method,simulation_rate,simulation_lo,simulation_hi"
    );
    let _ = write!(
        out,
        ",simulation_well_to_well,simulation_well_to_well_lo,simulation_well_to_well_hi"
    );
    if per {
        let _ = write!(
            out,
            ",simulation_drift,simulation_drift_lo,simulation_drift_hi,simulation_effective_diffusion,simulation_effective_diffusion_lo,simulation_effective_diffusion_hi,simulation_hop_forward,simulation_hop_backward"
        );
    }
    // last, so that the columns before it keep their places
    let status = r.points.iter().any(|p| p.simulation_status.is_some());
    if status {
        out.push_str(",simulation_status");
    }
    out.push('\n');
    for p in &r.points {
        let _ = write!(
            out,
            "{:?},{},{},{},{:?}",
            p.value,
            p.regime,
            f(p.gamma_over_omega_barrier),
            f(p.delta),
            p.barrier_height_kt
        );
        for k in CATALOGUE.iter().map(|f| f.key) {
            let _ = write!(out, ",{}", f(p.rates[k]));
        }
        if unc {
            for k in CATALOGUE.iter().map(|f| f.key) {
                let i = p
                    .uncertainty
                    .as_ref()
                    .and_then(|v| v.iter().find(|i| i.key == k.as_str()));
                let _ = write!(
                    out,
                    ",{},{}",
                    f(i.map(|i| i.ci95[0])),
                    f(i.map(|i| i.ci95[1]))
                );
            }
        }
        if per {
            periodic_fields(&mut out, p.periodic.as_ref(), false);
        }
        match &p.simulation {
            Some(s) => {
                let _ = write!(
                    out,
                    ",{},{:?},{:?},{:?},{},{},{}",
                    s.method,
                    s.rate,
                    s.rate_ci95[0],
                    s.rate_ci95[1],
                    f(s.well_to_well),
                    f(s.well_to_well_ci95.map(|c| c[0])),
                    f(s.well_to_well_ci95.map(|c| c[1]))
                );
                if per {
                    periodic_fields(&mut out, s.periodic.as_ref(), true);
                }
            }
            None => {
                let _ = write!(out, ",,,,,,,");
                if per {
                    out.push_str(",,,,,,,,");
                }
            }
        }
        if status {
            let _ = write!(out, ",{}", p.simulation_status.map_or("", |s| s.as_str()));
        }
        out.push('\n');
    }
    out
}

/// Drift, D_eff and hopping fields (with the intervals for a simulated point).
fn periodic_fields(out: &mut String, p: Option<&crate::scan::PeriodicPoint>, sim: bool) {
    let ci = |c: Option<[f64; 2]>, i: usize| f(c.map(|c| c[i]));
    match (p, sim) {
        (Some(p), true) => {
            let _ = write!(
                out,
                ",{:?},{},{},{},{},{},{},{}",
                p.drift,
                ci(p.drift_ci95, 0),
                ci(p.drift_ci95, 1),
                f(p.effective_diffusion),
                ci(p.effective_diffusion_ci95, 0),
                ci(p.effective_diffusion_ci95, 1),
                f(p.hop_forward),
                f(p.hop_backward)
            );
        }
        (Some(p), false) => {
            let _ = write!(
                out,
                ",{:?},{},{},{}",
                p.drift,
                f(p.effective_diffusion),
                f(p.hop_forward),
                f(p.hop_backward)
            );
        }
        (None, true) => out.push_str(",,,,,,,,"),
        (None, false) => out.push_str(",,,,"),
    }
}
