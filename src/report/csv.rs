//! CSV renderer for scans: one row per point, rates per the scenario's time unit; an empty field
//! where a rate does not apply. Floats are written in Rust's shortest round-trip form, so a value
//! read back is bit-identical to what `rate --json` prints for the same point.

use crate::scan::{RATE_KEYS, ScanReport, rate_of};
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
    for k in RATE_KEYS {
        let _ = write!(out, ",{k}");
    }
    let _ = writeln!(
        out,
        ",simulation_method,simulation_rate,simulation_lo,simulation_hi"
    );
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
        for k in RATE_KEYS {
            let _ = write!(out, ",{}", f(rate_of(&p.rates, k)));
        }
        match &p.simulation {
            Some(s) => {
                let _ = writeln!(
                    out,
                    ",{},{:?},{:?},{:?}",
                    s.method, s.rate, s.rate_ci95[0], s.rate_ci95[1]
                );
            }
            None => {
                let _ = writeln!(out, ",,,,");
            }
        }
    }
    out
}
