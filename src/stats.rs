//! Statistics of first-passage samples with censoring.
//!
//! - Rate: maximum likelihood for exponential waiting times with type-I censoring,
//!   k̂ = n_escaped / Σ observed times (escaped: first-passage time; censored: the horizon).
//! - 95% interval: the Poisson-process (chi-square) interval
//!   [χ²_{2n}(0.025), χ²_{2n+2}(0.975)] / (2 Σt) (e.g. Cox & Oakes, Analysis of Survival Data, §3.3;
//!   exact for a Poisson count in a fixed total exposure, approximate under censoring).
//! - MFPT ± standard error over the escaped trajectories, median, coefficient of variation.
//! - Exponentiality: Kolmogorov–Smirnov distance of the escaped times against the fitted exponential
//!   (truncated at the horizon when trajectories were censored), with the asymptotic Kolmogorov
//!   p-value (Marsaglia, Tsang & Wang 2003 give the exact law; Stephens' 1970 small-sample
//!   correction sqrt(n) + 0.12 + 0.11/sqrt(n) is used). The parameter is fitted from the same data,
//!   so the p-value is conservative (Lilliefors 1969).
//!
//! Sums use integer step counts, so the result does not depend on the order of the records.

use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// Fewer escapes than this draw a warning.
pub const MIN_ESCAPES: u64 = 30;
/// A censored fraction above this draws a warning.
pub const MAX_CENSORED_FRACTION: f64 = 0.2;

/// One finished trajectory.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Outcome {
    /// trajectory index
    pub index: u64,
    /// steps taken (first passage, or the horizon)
    pub steps: u64,
    /// escaped (true) or censored
    pub escaped: bool,
}

/// The summary of a set of outcomes.
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    /// trajectories
    pub trajectories: u64,
    /// escaped
    pub escaped: u64,
    /// censored
    pub censored: u64,
    /// rate (per time unit); 0 if nothing escaped
    pub rate: f64,
    /// 95% interval of the rate
    pub rate_ci95: [f64; 2],
    /// mean first-passage time of the escaped trajectories
    pub mfpt: Option<f64>,
    /// its standard error
    pub mfpt_se: Option<f64>,
    /// median first-passage time of the escaped trajectories
    pub median: Option<f64>,
    /// coefficient of variation of the escaped times (1 for an exponential)
    pub cv: Option<f64>,
    /// KS distance to the fitted exponential
    pub ks_distance: Option<f64>,
    /// its p-value
    pub ks_p_value: Option<f64>,
    /// total steps
    pub total_steps: u64,
    /// total observed time
    pub observed_time: f64,
    /// warnings
    pub warnings: Vec<String>,
}

/// Asymptotic Kolmogorov survival function Q(λ) = 2 Σ_{k≥1} (−1)^{k−1} e^{−2k²λ²}.
pub fn kolmogorov_q(lambda: f64) -> f64 {
    if lambda < 0.2 {
        return 1.0;
    }
    let mut s = 0.0;
    for k in 1..=100 {
        let kf = f64::from(k);
        let term = (-2.0 * kf * kf * lambda * lambda).exp();
        s += if k % 2 == 1 { term } else { -term };
        if term < 1e-17 {
            break;
        }
    }
    (2.0 * s).clamp(0.0, 1.0)
}

/// The Kolmogorov–Smirnov distance of `n` sorted samples from a continuous distribution;
/// `cdf(i)` is its CDF at the i-th smallest sample.
pub fn ks_distance(n: usize, cdf: impl Fn(usize) -> f64) -> f64 {
    let nf = n as f64;
    let mut d: f64 = 0.0;
    for i in 0..n {
        let f = cdf(i);
        let lo_e = i as f64 / nf;
        let hi_e = (i + 1) as f64 / nf;
        d = d.max((f - lo_e).abs()).max((hi_e - f).abs());
    }
    d
}

/// The asymptotic p-value of KS distance `d` from `n` samples, with Stephens' correction (see the
/// module comment).
pub fn ks_p_value(d: f64, n: u64) -> f64 {
    let sn = (n as f64).sqrt();
    kolmogorov_q((sn + 0.12 + 0.11 / sn) * d)
}

/// The 95% interval [χ²_{2n}(0.025), χ²_{2n+2}(0.975)] / (2 T) of a Poisson rate with `n` events
/// in exposure `exposure` (Garwood's limits; see the module comment).
pub fn poisson_interval(n: u64, exposure: f64) -> [f64; 2] {
    let lo = if n == 0 {
        0.0
    } else {
        ChiSquared::new(2.0 * n as f64)
            .map(|c| c.inverse_cdf(0.025))
            .unwrap_or(0.0)
            / (2.0 * exposure)
    };
    let hi = ChiSquared::new(2.0 * n as f64 + 2.0)
        .map(|c| c.inverse_cdf(0.975))
        .unwrap_or(f64::INFINITY)
        / (2.0 * exposure.max(f64::MIN_POSITIVE));
    [lo, hi]
}

/// Summarises outcomes with time step `dt` and horizon `max_steps`.
pub fn summarise(outcomes: &[Outcome], dt: f64, max_steps: u64) -> Summary {
    let n_all = outcomes.len() as u64;
    let mut esc: Vec<u64> = outcomes
        .iter()
        .filter(|o| o.escaped)
        .map(|o| o.steps)
        .collect();
    esc.sort_unstable();
    let n = esc.len() as u64;
    let total_steps: u64 = outcomes.iter().map(|o| o.steps).sum();
    let observed = total_steps as f64 * dt;
    let rate = if observed > 0.0 {
        n as f64 / observed
    } else {
        0.0
    };
    let [lo, hi] = poisson_interval(n, observed);
    let (mut mfpt, mut se, mut median, mut cv, mut ksd, mut ksp) =
        (None, None, None, None, None, None);
    if n > 0 {
        let sum: u128 = esc.iter().map(|&s| u128::from(s)).sum();
        let sum2: u128 = esc.iter().map(|&s| u128::from(s) * u128::from(s)).sum();
        let nf = n as f64;
        let mean_steps = sum as f64 / nf;
        let mean = mean_steps * dt;
        mfpt = Some(mean);
        if n > 1 {
            // variance from exact integer sums: (Σs² − (Σs)²/n)/(n − 1)
            let var_steps =
                ((sum2 as f64) - (sum as f64) * (sum as f64) / nf).max(0.0) / (nf - 1.0);
            let sd = var_steps.sqrt() * dt;
            se = Some(sd / nf.sqrt());
            cv = Some(sd / mean);
        }
        median = Some(if n % 2 == 1 {
            esc[(n / 2) as usize] as f64 * dt
        } else {
            0.5 * (esc[(n / 2 - 1) as usize] + esc[(n / 2) as usize]) as f64 * dt
        });
        // KS against the fitted exponential, truncated at the horizon if anything was censored
        let censored = n < n_all;
        let horizon = max_steps as f64 * dt;
        let norm = if censored {
            -(-rate * horizon).exp_m1()
        } else {
            1.0
        };
        let d = ks_distance(esc.len(), |i| -(-rate * esc[i] as f64 * dt).exp_m1() / norm);
        ksd = Some(d);
        ksp = Some(ks_p_value(d, n));
    }
    let censored = n_all - n;
    let mut warnings = Vec::new();
    if n < MIN_ESCAPES {
        warnings.push(format!(
            "only {n} escapes: the rate and its interval are rough; run more trajectories or a longer max_time"
        ));
    }
    if n_all > 0 && censored as f64 / n_all as f64 > MAX_CENSORED_FRACTION {
        warnings.push(format!(
            "{:.0}% of the trajectories were censored at max_time: the MFPT of the escaped ones is biased low; use the rate (censoring-aware) or raise simulation.max_time",
            100.0 * censored as f64 / n_all as f64
        ));
    }
    Summary {
        trajectories: n_all,
        escaped: n,
        censored,
        rate,
        rate_ci95: [lo, hi],
        mfpt,
        mfpt_se: se,
        median,
        cv,
        ks_distance: ksd,
        ks_p_value: ksp,
        total_steps,
        observed_time: observed,
        warnings,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Kolmogorov distribution: Q(1.36) = 0.0495 and Q(1.63) = 0.0098 (the familiar 5% and 1%
    // critical values 1.36 and 1.63; handbook tables, e.g. Smirnov 1948).
    #[test]
    fn kolmogorov_critical_values() {
        assert!((kolmogorov_q(1.358) - 0.05).abs() < 1e-3);
        assert!((kolmogorov_q(1.628) - 0.01).abs() < 1e-3);
    }

    // Chi-square interval for n = 10 events in exposure 1:
    // [chi2_20(0.025), chi2_22(0.975)]/2 = [4.7954, 18.3904] (Garwood's Poisson limits; from memory).
    #[test]
    fn poisson_interval() {
        let o: Vec<Outcome> = (0..10)
            .map(|i| Outcome {
                index: i,
                steps: 10,
                escaped: true,
            })
            .collect();
        let s = summarise(&o, 0.01, 1000);
        assert!((s.rate - 10.0).abs() < 1e-12);
        assert!((s.rate_ci95[0] - 4.795_4).abs() < 1e-3, "{:?}", s.rate_ci95);
        assert!(
            (s.rate_ci95[1] - 18.390_4).abs() < 1e-3,
            "{:?}",
            s.rate_ci95
        );
        assert_eq!(s.cv, Some(0.0));
    }
}
