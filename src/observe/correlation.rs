//! Moments and the integrated autocorrelation time of the position, streamed.
//!
//! The autocorrelation C(t) is accumulated by a multiple-tau correlator (Ramírez, Sukumaran,
//! Vorselaars & Likhtman, J. Chem. Phys. 133, 154103 (2010)): level 0 keeps the last
//! [`LAGS`] samples and correlates lags 0..16; each higher level receives averages of pairs of the
//! level below and correlates lags 8..16 of its own spacing, so lags up to 16·2^k cost O(16)
//! operations per sample and O(16 k) memory. Trajectories are correlated separately (the
//! registers are cleared at each end) and their sums pooled.
//!
//! τ_int = 1/2 + Σ_{t≥1} ρ(t) (in samples) is summed up to Sokal's automatic window: the
//! smallest lag W with W ≥ c τ_int(W), c = [`SOKAL_C`] (Madras & Sokal, J. Stat. Phys. 50, 109
//! (1988); Sokal, "Monte Carlo Methods in Statistical Mechanics: Foundations and New
//! Algorithms" (1996), §3). On the log-spaced lags of levels ≥ 1 the sum is the trapezoid
//! integral ∫_0^W ρ dt + ρ(W)/2, which equals the discrete sum on the unit-spaced lags of level 0.

use super::{PositionSummary, Sink};
use serde::Serialize;

/// Lags per level of the correlator.
pub const LAGS: usize = 16;
/// Levels (lags up to 16 · 2^40 samples).
const LEVELS: usize = 40;
/// Sokal's window constant: the window closes at W ≥ c τ_int(W); c = 6 leaves a truncation
/// error of about e^{−6} for an exponential decay.
pub const SOKAL_C: f64 = 6.0;
/// A lag enters the estimate only with at least this many pairs behind it.
pub const MIN_PAIRS: u64 = 100;

/// Count, range, mean and variance of the position (sums of x − x₀ with x₀ the first sample, so
/// the variance does not cancel catastrophically).
#[derive(Debug, Clone, Default)]
pub struct Moments {
    n: u64,
    shift: Option<f64>,
    min: f64,
    max: f64,
    sum: f64,
    sum2: f64,
}

impl Moments {
    /// Samples seen.
    pub fn count(&self) -> u64 {
        self.n
    }
    /// The mean.
    pub fn mean(&self) -> f64 {
        self.shift.unwrap_or(0.0) + self.sum / self.n.max(1) as f64
    }
    /// The standard deviation (n − 1 in the denominator).
    pub fn sd(&self) -> f64 {
        let n = self.n as f64;
        ((self.sum2 - self.sum * self.sum / n) / (n - 1.0).max(1.0))
            .max(0.0)
            .sqrt()
    }
    /// Smallest and largest position.
    pub fn range(&self) -> (f64, f64) {
        (self.min, self.max)
    }
    /// The summary for the report.
    pub fn summary(&self) -> PositionSummary {
        PositionSummary {
            min: self.min,
            max: self.max,
            mean: self.mean(),
            sd: self.sd(),
        }
    }
}

impl Sink for Moments {
    fn feed(&mut self, xs: &[f64]) {
        let Some(&x0) = xs.first() else { return };
        let s = *self.shift.get_or_insert_with(|| {
            self.min = x0;
            self.max = x0;
            x0
        });
        for &x in xs {
            let d = x - s;
            self.sum += d;
            self.sum2 += d * d;
            self.min = self.min.min(x);
            self.max = self.max.max(x);
        }
        self.n += xs.len() as u64;
    }
    fn end(&mut self, _dt: f64) {}
}

/// One level of the multiple-tau correlator.
#[derive(Debug, Clone, Copy, Default)]
struct Level {
    /// the last values, newest first
    reg: [f64; LAGS],
    filled: usize,
    corr: [f64; LAGS],
    pairs: [u64; LAGS],
    /// pending sum for the next level
    acc: f64,
    acc_n: u8,
}

/// The streamed multiple-tau autocorrelation of the position.
#[derive(Debug, Clone)]
pub struct Correlator {
    levels: Box<[Level; LEVELS]>,
    shift: Option<f64>,
    sum: f64,
    n: u64,
}

impl Default for Correlator {
    fn default() -> Self {
        Self::new()
    }
}

/// The integrated autocorrelation time of the position.
#[derive(Debug, Clone, Serialize)]
pub struct Autocorrelation {
    /// τ_int in samples
    pub tau_int: f64,
    /// Sokal's window W in samples (the largest usable lag when it did not close)
    pub window: f64,
    /// whether the window closed (W ≥ c τ_int(W) was reached)
    pub converged: bool,
    /// the estimator, in words
    pub rule: String,
}

impl Correlator {
    /// An empty correlator.
    pub fn new() -> Self {
        Self {
            levels: Box::new([Level::default(); LEVELS]),
            shift: None,
            sum: 0.0,
            n: 0,
        }
    }

    #[inline]
    fn add(&mut self, mut v: f64) {
        let mut k = 0;
        loop {
            let l = &mut self.levels[k];
            l.reg.copy_within(0..LAGS - 1, 1);
            l.reg[0] = v;
            l.filled = (l.filled + 1).min(LAGS);
            // level 0 correlates lags 0..16; higher levels the lags 8..16 not covered below
            let from = if k == 0 { 0 } else { LAGS / 2 };
            for j in from..l.filled {
                l.corr[j] += v * l.reg[j];
                l.pairs[j] += 1;
            }
            l.acc += v;
            l.acc_n += 1;
            if l.acc_n < 2 || k + 1 == LEVELS {
                return;
            }
            v = 0.5 * l.acc;
            l.acc = 0.0;
            l.acc_n = 0;
            k += 1;
        }
    }

    /// (lag in samples, ρ(lag)) on the correlator's grid, lags with at least [`MIN_PAIRS`] pairs.
    pub fn rho(&self) -> Vec<(f64, f64)> {
        let mu = self.sum / self.n.max(1) as f64;
        let c = |l: &Level, j: usize| l.corr[j] / l.pairs[j] as f64 - mu * mu;
        let c0 = c(&self.levels[0], 0);
        let mut out = Vec::new();
        for (k, l) in self.levels.iter().enumerate() {
            let from = if k == 0 { 0 } else { LAGS / 2 };
            for j in from..LAGS {
                if l.pairs[j] >= MIN_PAIRS && c0 > 0.0 {
                    out.push(((j as f64) * f64::from(1u32 << k.min(31)), c(l, j) / c0));
                }
            }
        }
        out
    }

    /// τ_int with Sokal's window (see the module comment).
    pub fn autocorrelation(&self) -> Autocorrelation {
        let rho = self.rho();
        let rule = format!(
            "multiple-tau autocorrelation of the position, summed to Sokal's window W ≥ {SOKAL_C} τ_int"
        );
        let (tau_int, window, converged) = sokal(&rho);
        Autocorrelation {
            tau_int,
            window,
            converged,
            rule,
        }
    }
}

/// τ_int(W) = ∫_0^W ρ + ρ(W)/2 on the grid, stopped at the first W ≥ c τ_int(W). Returns
/// (τ_int, W, closed); a constant series (no grid) gives τ_int = 1/2.
pub fn sokal(rho: &[(f64, f64)]) -> (f64, f64, bool) {
    let mut integral = 0.0;
    let mut last = (0.0, 0.5, false);
    for w in rho.windows(2) {
        let ((t0, r0), (t1, r1)) = (w[0], w[1]);
        integral += 0.5 * (r0 + r1) * (t1 - t0);
        let tau = (integral + 0.5 * r1).max(0.5);
        last = (tau, t1, false);
        if t1 >= SOKAL_C * tau {
            return (tau, t1, true);
        }
    }
    last
}

impl Sink for Correlator {
    fn feed(&mut self, xs: &[f64]) {
        let Some(&x0) = xs.first() else { return };
        let s = *self.shift.get_or_insert(x0);
        for &x in xs {
            let v = x - s;
            self.sum += v;
            self.add(v);
        }
        self.n += xs.len() as u64;
    }
    fn end(&mut self, _dt: f64) {
        for l in self.levels.iter_mut() {
            l.filled = 0;
            l.acc = 0.0;
            l.acc_n = 0;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::seed;
    use rand::RngExt;
    use rand_distr::StandardNormal;

    // AR(1) x_{t+1} = φ x_t + ε has ρ(t) = φ^t and τ_int = (1 + φ)/(2(1 − φ)) (common practice,
    // e.g. Sokal 1996 §3). φ = 0.98 gives τ_int = 49.5; with 10^6 samples the relative standard
    // error of τ_int is about sqrt(2(2W+1)/N) ≈ 0.06 (Madras & Sokal 1988, eq. 2.23, from
    // memory) with W ≈ 300, so 25% covers 4 of them plus the smoothing of the coarse levels.
    #[test]
    fn ar1_tau() {
        let phi: f64 = 0.98;
        let mut rng = seed::stream(3, 0);
        let mut x = 0.0;
        let mut c = Correlator::new();
        let xs: Vec<f64> = (0..1_000_000)
            .map(|_| {
                x = phi * x + rng.sample::<f64, _>(StandardNormal);
                x
            })
            .collect();
        c.feed(&xs);
        let a = c.autocorrelation();
        let exact = (1.0 + phi) / (2.0 * (1.0 - phi));
        assert!(a.converged);
        assert!(
            (a.tau_int - exact).abs() < 0.25 * exact,
            "{} vs {exact}",
            a.tau_int
        );
    }

    // Independent samples: τ_int = 1/2 (ρ(t) = δ_t0).
    #[test]
    fn white_noise_tau() {
        let mut rng = seed::stream(4, 0);
        let xs: Vec<f64> = (0..100_000)
            .map(|_| rng.sample::<f64, _>(StandardNormal))
            .collect();
        let mut c = Correlator::new();
        c.feed(&xs);
        let a = c.autocorrelation();
        // standard error of the sum over a window of ~3 lags is ~ sqrt(7/1e5) ≈ 0.01; 0.1 is ~10 of them
        assert!((a.tau_int - 0.5).abs() < 0.1, "{}", a.tau_int);
    }
}
