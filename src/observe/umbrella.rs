//! D at the centre of one umbrella window from the position autocorrelation of the harmonically
//! restrained coordinate.
//!
//! A coordinate held by a spring k (energy k(x − c)²/2, k in kT/length²) moves, if the free energy
//! is flat across the window, as an Ornstein–Uhlenbeck process: C(t) = ⟨δx(0)δx(t)⟩ = var e^{−t/τ}
//! with τ = var/D, so ∫₀^∞ C(t) dt = var²/D and
//!
//!   D = var(x)² / ∫₀^∞ C(t) dt
//!
//! (Woolf & Roux, J. Am. Chem. Soc. 116, 5916 (1994); Hummer, New J. Phys. 7, 34 (2005), the
//! section on harmonic restraints). The integral is the trapezoidal rule on the sampled C(mΔt),
//! truncated at the first lag where the estimate of C is ≤ 0, or earlier at the automatic window
//! of Sokal (the first lag M with M ≥ 6 τ_int(M), τ_int(M) = 1/2 + Σ_{m≤M} C(m)/C(0) in frames;
//! Sokal, "Monte Carlo methods in statistical mechanics", 1997, Sec. 3): for an exponential C
//! the neglected tail is below e^{−6} of the integral.
//!
//! Error: batch means — the series is cut into `BATCHES` consecutive batches, D is computed in each
//! with the same window, and the standard error is their standard deviation / sqrt(batches), with
//! a Student-t 95% interval. The batches must be long compared with the window (checked).
//!
//! Consistency: for a flat free energy var(x) = 1/k; a variance far from 1/k means the free energy
//! has curvature across the window, and D is then that of the window's effective harmonic well
//! (a warning says so).

use serde::Serialize;
use statrs::distribution::{ContinuousCDF, StudentsT};
use thiserror::Error;

/// Batches of the batch-means error.
pub const BATCHES: usize = 20;
/// Sokal's window factor c (window M ≥ c τ_int(M)).
pub const SOKAL_C: f64 = 6.0;

/// A mistake in the input of the window analysis.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum UmbrellaError {
    /// A sample is NaN or infinite.
    #[error("window sample {index} is not a finite number")]
    NonFinite {
        /// sample index
        index: usize,
    },
    /// The sampling interval or the spring constant is not positive.
    #[error("sampling interval ({interval}) and spring constant ({spring}) must be positive")]
    BadParameter {
        /// sampling interval
        interval: f64,
        /// spring constant
        spring: f64,
    },
    /// The series is too short for its correlation time.
    #[error(
        "window of {samples} samples is too short: its autocorrelation lasts {window} samples and \
         the error needs {BATCHES} batches of at least 20 windows each"
    )]
    TooShort {
        /// samples given
        samples: usize,
        /// integration window in frames
        window: usize,
    },
    /// The coordinate never moves.
    #[error("window samples have zero variance")]
    NoVariance,
}

/// D of one umbrella window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WindowDiffusion {
    /// mean position (where D applies)
    pub mean: f64,
    /// variance of the position
    pub variance: f64,
    /// its batch-means standard error
    pub variance_se: f64,
    /// 1/k, the variance for a flat free energy
    pub variance_flat: f64,
    /// ∫ C(t) dt over the window
    pub integral: f64,
    /// integration window in frames
    pub window_frames: usize,
    /// why the integral stopped there: "first zero of C" or "automatic window"
    pub truncation: &'static str,
    /// D = var² / ∫C
    pub d: f64,
    /// batch-means standard error of D
    pub d_se: f64,
    /// 95% interval (Student t over the batches)
    pub d_ci95: [f64; 2],
    /// batches used for the error
    pub batches: usize,
    /// warnings (variance far from 1/k)
    pub warnings: Vec<String>,
}

/// Mean and variance (1/N) of a series.
fn moments(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    (mean, x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n)
}

/// C(m) = Σ_t δx_t δx_{t+m} / (N − m) about `mean`.
fn autocovariance(x: &[f64], mean: f64, m: usize) -> f64 {
    let s: f64 = x
        .iter()
        .zip(&x[m..])
        .map(|(a, b)| (a - mean) * (b - mean))
        .sum();
    s / (x.len() - m) as f64
}

/// Trapezoidal ∫₀^{MΔt} C over lags 0..=window.
fn integral(x: &[f64], mean: f64, var: f64, window: usize, interval: f64) -> f64 {
    let inner: f64 = (1..window).map(|m| autocovariance(x, mean, m)).sum();
    interval * (var / 2.0 + inner + autocovariance(x, mean, window) / 2.0)
}

/// D at the mean position of one window: samples every `interval`, spring constant `spring`
/// (kT/length², in the samples' length unit).
pub fn window_diffusion(
    samples: &[f64],
    interval: f64,
    spring: f64,
) -> Result<WindowDiffusion, UmbrellaError> {
    if !(interval > 0.0 && interval.is_finite() && spring > 0.0 && spring.is_finite()) {
        return Err(UmbrellaError::BadParameter { interval, spring });
    }
    if let Some(index) = samples.iter().position(|v| !v.is_finite()) {
        return Err(UmbrellaError::NonFinite { index });
    }
    let n = samples.len();
    if n < BATCHES * 20 {
        return Err(UmbrellaError::TooShort {
            samples: n,
            window: 1,
        });
    }
    let (mean, var) = moments(samples);
    if var <= 0.0 {
        return Err(UmbrellaError::NoVariance);
    }
    // Find the window: first C ≤ 0, or Sokal's M ≥ c τ_int(M).
    let max_window = n / (BATCHES * 20);
    let mut tau_int = 0.5;
    let mut window = 0;
    let mut truncation = "first zero of C";
    for m in 1..=max_window {
        let c = autocovariance(samples, mean, m);
        window = m;
        if c <= 0.0 {
            break;
        }
        tau_int += c / var;
        if m as f64 >= SOKAL_C * tau_int {
            truncation = "automatic window";
            break;
        }
        if m == max_window {
            return Err(UmbrellaError::TooShort {
                samples: n,
                window: m,
            });
        }
    }
    let total = integral(samples, mean, var, window, interval);
    let d = var * var / total;

    let len = n / BATCHES;
    let per_batch: Vec<(f64, f64)> = (0..BATCHES)
        .map(|b| {
            let x = &samples[b * len..(b + 1) * len];
            let (m, v) = moments(x);
            (v, v * v / integral(x, m, v, window, interval))
        })
        .collect();
    let sd = |vals: &[f64]| {
        let m = vals.iter().sum::<f64>() / vals.len() as f64;
        (vals.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (vals.len() - 1) as f64).sqrt()
    };
    let root = (BATCHES as f64).sqrt();
    let variance_se = sd(&per_batch.iter().map(|p| p.0).collect::<Vec<_>>()) / root;
    let d_se = sd(&per_batch.iter().map(|p| p.1).collect::<Vec<_>>()) / root;
    let t = StudentsT::new(0.0, 1.0, (BATCHES - 1) as f64)
        .map(|s| s.inverse_cdf(0.975))
        .unwrap_or(2.093);

    let variance_flat = 1.0 / spring;
    let mut warnings = Vec::new();
    // 10%: a free-energy curvature of a tenth of k across the window, beyond the 4-SE noise.
    let off = (var - variance_flat).abs();
    if off > 0.1 * variance_flat && off > 4.0 * variance_se {
        warnings.push(format!(
            "variance {var:.4e} differs from 1/k = {variance_flat:.4e}: the free energy is not \
             flat across this window, so D is that of the window's effective harmonic well"
        ));
    }
    Ok(WindowDiffusion {
        mean,
        variance: var,
        variance_se,
        variance_flat,
        integral: total,
        window_frames: window,
        truncation,
        d,
        d_se,
        d_ci95: [d - t * d_se, d + t * d_se],
        batches: BATCHES,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Too short, constant, non-finite and non-positive inputs are errors, not numbers.
    #[test]
    fn bad_inputs_are_errors() {
        assert!(matches!(
            window_diffusion(&[0.0; 10], 0.1, 1.0),
            Err(UmbrellaError::TooShort { .. })
        ));
        assert!(matches!(
            window_diffusion(&[1.0; 1000], 0.1, 1.0),
            Err(UmbrellaError::NoVariance)
        ));
        let mut x = vec![0.0; 1000];
        x[3] = f64::NAN;
        assert!(matches!(
            window_diffusion(&x, 0.1, 1.0),
            Err(UmbrellaError::NonFinite { index: 3 })
        ));
        assert!(matches!(
            window_diffusion(&x, -0.1, 1.0),
            Err(UmbrellaError::BadParameter { .. })
        ));
    }
}
