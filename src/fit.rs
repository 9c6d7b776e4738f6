//! Straight-line fits for scans: weighted least squares y = a + b x with standard errors and 95%
//! intervals (e.g. Press et al., Numerical Recipes, §15.2). With weights w_i = 1/σ_i² the covariance
//! is (XᵀWX)⁻¹, inflated by the reduced χ² when that exceeds 1 (the scatter is then larger than the
//! stated errors); without weights the residual variance sets the scale. Intervals use Student t on
//! n − 2 degrees of freedom.
//!
//! Used for the Arrhenius fit ln k = ln A − E_a/(k_B T) and the force fit ln k = ln k_0 + F x‡/kT.

use serde::Serialize;
use statrs::distribution::{ContinuousCDF, StudentsT};

/// A fitted line.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Line {
    /// a
    pub intercept: f64,
    /// b
    pub slope: f64,
    /// standard error of a
    pub intercept_se: f64,
    /// standard error of b
    pub slope_se: f64,
    /// Student t quantile for 95% with n − 2 degrees of freedom
    pub t95: f64,
    /// points used
    pub points: usize,
}

/// Fits y = a + b x; `sigma` gives each y's standard error (None: unweighted). Needs 3 points or
/// more with finite values.
pub fn line(x: &[f64], y: &[f64], sigma: Option<&[f64]>) -> Option<Line> {
    let n = x.len();
    if n < 3 || y.len() != n {
        return None;
    }
    let w: Vec<f64> = match sigma {
        Some(s) => s.iter().map(|v| 1.0 / (v * v)).collect(),
        None => vec![1.0; n],
    };
    if x.iter().chain(y).chain(&w).any(|v| !v.is_finite()) {
        return None;
    }
    let (mut sw, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for i in 0..n {
        sw += w[i];
        sx += w[i] * x[i];
        sy += w[i] * y[i];
        sxx += w[i] * x[i] * x[i];
        sxy += w[i] * x[i] * y[i];
    }
    let det = sw * sxx - sx * sx;
    if det.abs() <= 1e-300 {
        return None;
    }
    let slope = (sw * sxy - sx * sy) / det;
    let intercept = (sxx * sy - sx * sxy) / det;
    let chi2: f64 = (0..n)
        .map(|i| w[i] * (y[i] - intercept - slope * x[i]).powi(2))
        .sum();
    let dof = (n - 2) as f64;
    let scale = match sigma {
        Some(_) => (chi2 / dof).max(1.0),
        None => chi2 / dof,
    };
    let t95 = StudentsT::new(0.0, 1.0, dof)
        .map(|t| t.inverse_cdf(0.975))
        .unwrap_or(f64::NAN);
    Some(Line {
        intercept,
        slope,
        intercept_se: (scale * sxx / det).sqrt(),
        slope_se: (scale * sw / det).sqrt(),
        t95,
        points: n,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // An exact line is recovered with zero residual error (common practice, no source).
    #[test]
    fn exact_line() {
        let x = [1.0, 2.0, 3.0, 4.0];
        let y: Vec<f64> = x.iter().map(|v| 0.5 - 2.0 * v).collect();
        let l = line(&x, &y, None).unwrap();
        assert!((l.slope + 2.0).abs() < 1e-12 && (l.intercept - 0.5).abs() < 1e-12);
        assert!(l.slope_se < 1e-10);
        // t(0.975, 2 dof) = 4.302653 (handbook t tables)
        assert!((l.t95 - 4.302_653).abs() < 1e-5);
    }

    // Weighted fit with stated errors: standard errors from (XᵀWX)⁻¹ for a two-point-like design:
    // x = (0,0,1,1) with σ = 1 gives se(slope) = 1 (closed form).
    #[test]
    fn weighted_standard_errors() {
        let x = [0.0, 0.0, 1.0, 1.0];
        let y = [1.0, 1.0, 3.0, 3.0];
        let l = line(&x, &y, Some(&[1.0; 4])).unwrap();
        assert!((l.slope - 2.0).abs() < 1e-12);
        assert!((l.slope_se - 1.0).abs() < 1e-12);
    }
}
