//! The weighted cubic smoothing spline of a noisy profile, and the choice of its smoothing.
//!
//! Given rows (x_i, y_i) with standard errors σ_i, the fit g minimises
//! Σ (y_i − g(x_i))²/σ_i² + α ∫ g''(x)² dx. The minimiser is the natural cubic spline with knots at
//! every x_i (Reinsch, Numer. Math. 10, 177 (1967)); with h_i = x_{i+1} − x_i, the tridiagonal
//! n × (n−2) matrix Q (columns j: 1/h_j, −1/h_j − 1/h_{j+1}, 1/h_{j+1}) and the tridiagonal
//! (n−2) × (n−2) matrix R (diagonal (h_j + h_{j+1})/3, off-diagonal h_{j+1}/6), the second
//! derivatives γ at the interior knots solve the pentadiagonal system
//! (R + α Qᵀ Σ Q) γ = Qᵀ y with Σ = diag(σ_i²), and g = y − α Σ Q γ (Green & Silverman,
//! Nonparametric Regression and Generalized Linear Models (1994), Sec. 2.3 and 3.5: the Reinsch
//! algorithm). The system is solved by a banded LDLᵀ factorisation in O(n).
//!
//! Effective degrees of freedom: the trace of the influence matrix, tr H = 2 + tr(B⁻¹R) with
//! B = R + α QᵀΣQ (from α QᵀΣQ = B − R), where the band of B⁻¹ that the trace needs comes from the
//! LDLᵀ factors by the recursion of Hutchinson & de Hoog, Numer. Math. 47, 99 (1985), also O(n).
//!
//! Choice of α. [`Rule::Risk`], the default, minimises Stein's unbiased estimate of the weighted
//! mean squared error of the fit, E Σ (g_i − μ_i)²/σ_i² = E(χ²) − n + 2 tr(W H Σ) (Stein, Ann.
//! Stat. 9, 1135 (1981); for independent rows tr(W H Σ) = tr H and this is Mallows' C_p, the
//! UBRE of Craven & Wahba 1979). Σ is the same noise model the profile-uncertainty draws use:
//! σ_i per row, Gaussian-smoothed white noise of correlation length ℓ. For correlated rows the
//! trace is estimated with [`RISK_PROBES`] fixed noise vectors e drawn from that model
//! (E[eᵀ W H e] = tr(W H Σ); Hutchinson, Commun. Stat. Simul. 18, 1059 (1989)), the same vectors at
//! every α so the estimate is a smooth function of α. The stated correlation may be wrong, and
//! either error undersmooths (independent noise read under a correlated model looks like signal at
//! high frequency, correlated noise read as independent like signal at low frequency), so with
//! ℓ > 0 the larger of the two minimisers (stated ℓ, and independent rows) is taken: it is the one
//! the true model picks when one of the two is right. Correlated noise is exactly the case in which
//! both simpler rules fail on free-energy profiles: the noise then has wiggles a few rows wide,
//! the size of a thermal barrier width, and χ² = n flattens the barrier to meet it (rates 1.5–2×
//! too high on the example profile with 0.3 kT noise over five rows), while cross-validation takes
//! the wiggles for signal. [`Rule::ChiSquare`] is Reinsch's own criterion: the smoothest fit whose
//! χ² = Σ (y_i − g_i)²/σ_i² equals n. It uses the stated σ_i directly, and it keeps its meaning
//! for noise correlated between rows, because the true profile has E(χ²) = n whatever the
//! correlation (each term has expectation one); generalised cross-validation assumes independent
//! rows and undersmooths correlated noise, leaving noise wiggles as features (Opsomer, Wang &
//! Yang, Stat. Sci. 16, 134 (2001)). [`Rule::CrossValidation`] minimises the weighted GCV score
//! n χ²/(n − tr H)² (Craven & Wahba, Numer. Math. 31, 377 (1979)) and needs no trust in the σ_i
//! scale. χ²(α) increases monotonically with α (Reinsch 1967), so χ² = n is found by bisection in
//! ln α; when even the straight line (α → ∞) has χ² ≤ n the data are consistent with a line and
//! the fit is that line.

/// How the smoothing parameter is chosen.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Rule {
    /// minimum of the unbiased estimate of the fit's mean squared error under the stated noise
    /// model: σ_i per row, Gaussian correlation over the given length (0 = independent rows)
    Risk {
        /// correlation length of the noise, in the table's length unit
        correlation_length: f64,
    },
    /// χ² = n (Reinsch 1967)
    ChiSquare,
    /// minimum of the generalised cross-validation score (Craven & Wahba 1979)
    CrossValidation,
}

impl Rule {
    /// The name used in scenario files and reports.
    pub fn name(self) -> &'static str {
        match self {
            Self::Risk { .. } => "unbiased-risk",
            Self::ChiSquare => "chi-square",
            Self::CrossValidation => "cross-validation",
        }
    }
}

/// A fitted smoothing spline: values and second derivatives at the knots (natural ends).
#[derive(Debug, Clone)]
pub struct Smoothed {
    /// fitted values g_i
    pub values: Vec<f64>,
    /// second derivatives at the knots (zero at both ends)
    pub curvatures: Vec<f64>,
    /// the smoothing parameter α (∞ for the straight line)
    pub alpha: f64,
    /// Σ (y_i − g_i)²/σ_i²
    pub chi2: f64,
    /// effective degrees of freedom tr H (2 for a line, n for interpolation)
    pub edf: f64,
    /// n − tr H, computed without cancellation near interpolation
    pub residual_dof: f64,
}

/// D and the two subdiagonals of the unit lower factor of B = L D Lᵀ.
type Factors = (Vec<f64>, Vec<f64>, Vec<f64>);

/// The pentadiagonal symmetric matrix B = R + α QᵀΣQ by diagonals, and Qᵀy.
struct Reinsch {
    /// Q's three entries per column j (rows j, j+1, j+2)
    q: Vec<[f64; 3]>,
    /// R's diagonal and first off-diagonal
    r0: Vec<f64>,
    r1: Vec<f64>,
    /// QᵀΣQ's diagonals 0, 1, 2
    c0: Vec<f64>,
    c1: Vec<f64>,
    c2: Vec<f64>,
    qty: Vec<f64>,
}

impl Reinsch {
    fn new(x: &[f64], y: &[f64], var: &[f64]) -> Self {
        let n = x.len();
        let m = n - 2;
        let h: Vec<f64> = x.windows(2).map(|w| w[1] - w[0]).collect();
        let q: Vec<[f64; 3]> = (0..m)
            .map(|j| [1.0 / h[j], -1.0 / h[j] - 1.0 / h[j + 1], 1.0 / h[j + 1]])
            .collect();
        let r0 = (0..m).map(|j| (h[j] + h[j + 1]) / 3.0).collect();
        let r1 = (0..m).map(|j| h[j + 1] / 6.0).collect();
        // (QᵀΣQ)_{jk} = Σ_i Q_ij σ_i² Q_ik; column j touches rows j..j+2
        let mut c0 = vec![0.0; m];
        let mut c1 = vec![0.0; m];
        let mut c2 = vec![0.0; m];
        for j in 0..m {
            c0[j] = (0..3).map(|t| q[j][t] * q[j][t] * var[j + t]).sum();
            if j + 1 < m {
                // shared rows j+1, j+2
                c1[j] = q[j][1] * q[j + 1][0] * var[j + 1] + q[j][2] * q[j + 1][1] * var[j + 2];
            }
            if j + 2 < m {
                c2[j] = q[j][2] * q[j + 2][0] * var[j + 2];
            }
        }
        let qty = (0..m)
            .map(|j| q[j][0] * y[j] + q[j][1] * y[j + 1] + q[j][2] * y[j + 2])
            .collect();
        Self {
            q,
            r0,
            r1,
            c0,
            c1,
            c2,
            qty,
        }
    }

    fn factor(&self, alpha: f64) -> Factors {
        let m = self.r0.len();
        let a0: Vec<f64> = (0..m).map(|j| self.r0[j] + alpha * self.c0[j]).collect();
        let a1: Vec<f64> = (0..m).map(|j| self.r1[j] + alpha * self.c1[j]).collect();
        let a2: Vec<f64> = (0..m).map(|j| alpha * self.c2[j]).collect();
        ldlt5(&a0, &a1, &a2)
    }

    /// The residuals y − g = α Σ Q γ, formed directly (y − g would cancel near interpolation).
    fn residuals(&self, var: &[f64], alpha: f64, gamma: &[f64]) -> Vec<f64> {
        let n = var.len();
        let mut qg = vec![0.0; n];
        for (j, g) in gamma.iter().enumerate() {
            for t in 0..3 {
                qg[j + t] += self.q[j][t] * g;
            }
        }
        (0..n).map(|i| alpha * var[i] * qg[i]).collect()
    }

    /// g = y − α Σ Q γ
    fn values(&self, y: &[f64], var: &[f64], alpha: f64, gamma: &[f64]) -> Vec<f64> {
        let r = self.residuals(var, alpha, gamma);
        y.iter().zip(&r).map(|(y, r)| y - r).collect()
    }

    /// Solves at a finite α > 0: the factors of B, γ, the residuals y − g and χ² (no trace:
    /// what the probe-based risk needs).
    fn solve(&self, var: &[f64], alpha: f64) -> (Factors, Vec<f64>, Vec<f64>, f64) {
        let fac = self.factor(alpha);
        let gamma = band_solve(&fac.0, &fac.1, &fac.2, self.qty.clone());
        let res = self.residuals(var, alpha, &gamma);
        let chi2 = (0..var.len())
            .map(|i| {
                if var[i] > 0.0 {
                    res[i] * res[i] / var[i]
                } else {
                    0.0
                }
            })
            .sum();
        (fac, gamma, res, chi2)
    }

    /// H e for probe data e with the factors of B at α already made.
    fn apply(&self, e: &[f64], var: &[f64], alpha: f64, fac: &Factors) -> Vec<f64> {
        let m = self.r0.len();
        let qty: Vec<f64> = (0..m)
            .map(|j| self.q[j][0] * e[j] + self.q[j][1] * e[j + 1] + self.q[j][2] * e[j + 2])
            .collect();
        let gamma = band_solve(&fac.0, &fac.1, &fac.2, qty);
        self.values(e, var, alpha, &gamma)
    }

    /// Fit at a finite α > 0.
    fn fit(&self, y: &[f64], var: &[f64], alpha: f64) -> Smoothed {
        let m = self.r0.len();
        let n = m + 2;
        let ((d, e, f), gamma, res, chi2) = self.solve(var, alpha);
        let values: Vec<f64> = y.iter().zip(&res).map(|(y, r)| y - r).collect();
        // tr H = 2 + tr(B⁻¹R) = n − α tr(B⁻¹ QᵀΣQ) from the band of B⁻¹ (Hutchinson & de Hoog);
        // each form is taken where it does not cancel: the first for strong smoothing, the
        // second near interpolation (where n − tr H is tiny and cross-validation divides by it)
        let (s0, s1, s2) = inverse_band(&d, &e, &f);
        let (mut tr_r, mut tr_c) = (0.0, 0.0);
        for j in 0..m {
            tr_r += s0[j] * self.r0[j];
            tr_c += s0[j] * self.c0[j];
            if j + 1 < m {
                tr_r += 2.0 * s1[j] * self.r1[j];
                tr_c += 2.0 * s1[j] * self.c1[j];
            }
            if j + 2 < m {
                tr_c += 2.0 * s2[j] * self.c2[j];
            }
        }
        let residual_dof = alpha * tr_c;
        let edf = 2.0 + tr_r;
        let mut curvatures = vec![0.0; n];
        curvatures[1..=m].copy_from_slice(&gamma);
        Smoothed {
            values,
            curvatures,
            alpha,
            chi2,
            edf: if edf < 0.5 * n as f64 {
                edf
            } else {
                n as f64 - residual_dof
            },
            residual_dof: if edf < 0.5 * n as f64 {
                n as f64 - edf
            } else {
                residual_dof
            },
        }
    }

    /// The weighted least-squares straight line (the α → ∞ limit).
    fn line(&self, x: &[f64], y: &[f64], var: &[f64]) -> Smoothed {
        let w: Vec<f64> = var.iter().map(|v| 1.0 / v).collect();
        let sw: f64 = w.iter().sum();
        let xm = w.iter().zip(x).map(|(w, x)| w * x).sum::<f64>() / sw;
        let ym = w.iter().zip(y).map(|(w, y)| w * y).sum::<f64>() / sw;
        let sxx: f64 = w.iter().zip(x).map(|(w, x)| w * (x - xm).powi(2)).sum();
        let sxy: f64 = (0..x.len()).map(|i| w[i] * (x[i] - xm) * (y[i] - ym)).sum();
        let slope = sxy / sxx;
        let values: Vec<f64> = x.iter().map(|x| ym + slope * (x - xm)).collect();
        let chi2 = (0..x.len())
            .map(|i| (y[i] - values[i]).powi(2) * w[i])
            .sum();
        Smoothed {
            values,
            curvatures: vec![0.0; x.len()],
            alpha: f64::INFINITY,
            chi2,
            edf: 2.0,
            residual_dof: x.len() as f64 - 2.0,
        }
    }
}

/// Solves L D Lᵀ γ = z for the factors of [`ldlt5`].
fn band_solve(d: &[f64], e: &[f64], f: &[f64], mut z: Vec<f64>) -> Vec<f64> {
    let m = d.len();
    for i in 0..m {
        if i >= 1 {
            z[i] -= e[i - 1] * z[i - 1];
        }
        if i >= 2 {
            z[i] -= f[i - 2] * z[i - 2];
        }
    }
    let mut gamma = vec![0.0; m];
    for i in (0..m).rev() {
        let mut v = z[i] / d[i];
        if i + 1 < m {
            v -= e[i] * gamma[i + 1];
        }
        if i + 2 < m {
            v -= f[i] * gamma[i + 2];
        }
        gamma[i] = v;
    }
    gamma
}

/// LDLᵀ of a symmetric positive definite pentadiagonal matrix given by its diagonals a0, a1, a2:
/// returns D and the two subdiagonals of the unit lower factor (e_i = L_{i+1,i}, f_i = L_{i+2,i}).
fn ldlt5(a0: &[f64], a1: &[f64], a2: &[f64]) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let m = a0.len();
    let mut d = vec![0.0; m];
    let mut e = vec![0.0; m];
    let mut f = vec![0.0; m];
    for i in 0..m {
        let mut di = a0[i];
        if i >= 1 {
            di -= e[i - 1] * e[i - 1] * d[i - 1];
        }
        if i >= 2 {
            di -= f[i - 2] * f[i - 2] * d[i - 2];
        }
        d[i] = di;
        let mut ei = a1[i];
        if i >= 1 {
            ei -= f[i - 1] * e[i - 1] * d[i - 1];
        }
        e[i] = ei / di;
        f[i] = a2[i] / di;
    }
    (d, e, f)
}

/// Diagonal and first off-diagonal of B⁻¹ from B = L D Lᵀ (Hutchinson & de Hoog 1985): from
/// Lᵀ B⁻¹ = D⁻¹ L⁻¹, row i gives S_ij = −e_i S_{i+1,j} − f_i S_{i+2,j} (j > i) and
/// S_ii = 1/d_i − e_i S_{i+1,i} − f_i S_{i+2,i}; only entries within the band are ever needed.
fn inverse_band(d: &[f64], e: &[f64], f: &[f64]) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let m = d.len();
    let mut s0 = vec![0.0; m];
    let mut s1 = vec![0.0; m];
    let mut s2 = vec![0.0; m];
    for i in (0..m).rev() {
        let s11 = if i + 1 < m { s0[i + 1] } else { 0.0 };
        let s12 = if i + 2 < m { s1[i + 1] } else { 0.0 };
        let s22 = if i + 2 < m { s0[i + 2] } else { 0.0 };
        let (ei, fi) = (
            if i + 1 < m { e[i] } else { 0.0 },
            if i + 2 < m { f[i] } else { 0.0 },
        );
        s2[i] = -ei * s12 - fi * s22;
        s1[i] = -ei * s11 - fi * s12;
        s0[i] = 1.0 / d[i] - ei * s1[i] - fi * s2[i];
    }
    (s0, s1, s2)
}

/// Noise vectors of the risk estimate for correlated rows: enough that the trace estimate's
/// relative error (about sqrt(2/P) for Gaussian probes) moves the minimum of a flat risk curve
/// little, few enough that a 10⁵-row table fits in about a second.
pub const RISK_PROBES: usize = 12;

/// Probe vectors e_p in data units: σ_i times Gaussian-smoothed white noise of unit marginal
/// variance (the profile-uncertainty model; kernel cut at 6ℓ where the weight is e^(−18)).
fn probes(x: &[f64], sigma: &[f64], ell: f64) -> Vec<Vec<f64>> {
    use rand::RngExt;
    let n = x.len();
    (0..RISK_PROBES)
        .map(|p| {
            let mut rng = crate::seed::stream(crate::seed::PROBES, p as u64);
            let xi: Vec<f64> = (0..n)
                .map(|_| rng.sample::<f64, _>(rand_distr::StandardNormal))
                .collect();
            let mut out = vec![0.0; n];
            let mut start = 0;
            for i in 0..n {
                while x[i] - x[start] > 6.0 * ell {
                    start += 1;
                }
                let (mut s, mut w2) = (0.0, 0.0);
                for j in start..n {
                    let d = (x[j] - x[i]) / ell;
                    if d > 6.0 {
                        break;
                    }
                    let w = (-0.5 * d * d).exp();
                    s += w * xi[j];
                    w2 += w * w;
                }
                out[i] = sigma[i] * s / w2.sqrt();
            }
            out
        })
        .collect()
}

/// Minimises `score` over ln α in [lo, hi]: a coarse grid, then golden-section refinement around
/// the best grid point. Returns (ln α, score) of the best point, or None if the line wins.
fn minimise(lo: f64, hi: f64, score: &dyn Fn(f64) -> f64, line: f64) -> Option<f64> {
    // one point per decade of α over the 40-decade bracket, then golden section to 1e-3 in ln α
    // (the scores are flat near their minimum: 0.1% in α changes no fitted value visibly)
    let k = 41;
    let grid: Vec<f64> = (0..k)
        .map(|i| lo + (hi - lo) * i as f64 / (k - 1) as f64)
        .collect();
    let (best, best_v) = grid
        .iter()
        .enumerate()
        .map(|(i, &g)| (i, score(g)))
        .fold((0, f64::INFINITY), |a, b| if b.1 < a.1 { b } else { a });
    if line <= best_v {
        return None;
    }
    let (mut a, mut b) = (grid[best.saturating_sub(1)], grid[(best + 1).min(k - 1)]);
    let r = 0.5 * (5f64.sqrt() - 1.0);
    let mut c = b - r * (b - a);
    let mut d = a + r * (b - a);
    let (mut fc, mut fd) = (score(c), score(d));
    for _ in 0..60 {
        if fc < fd {
            b = d;
            d = c;
            fd = fc;
            c = b - r * (b - a);
            fc = score(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + r * (b - a);
            fd = score(d);
        }
        if b - a < 1e-3 {
            break;
        }
    }
    Some(0.5 * (a + b))
}

/// Fits the smoothing spline through (x_i, y_i) with standard errors σ_i (all positive), the
/// smoothing chosen by `rule`. Needs at least 4 rows with strictly increasing x.
pub fn fit(x: &[f64], y: &[f64], sigma: &[f64], rule: Rule) -> Smoothed {
    let n = x.len();
    assert!(
        n >= 4 && y.len() == n && sigma.len() == n,
        "smoothing needs >= 4 rows"
    );
    let var: Vec<f64> = sigma.iter().map(|s| s * s).collect();
    let sys = Reinsch::new(x, y, &var);
    let line = sys.line(x, y, &var);
    let target = n as f64;
    if rule == Rule::ChiSquare && line.chi2 <= target {
        return line;
    }
    // Natural scale of α: the penalty term α ∫g''² balances χ² when α ~ h³/σ² per row
    // (g'' ~ δ/h² over one spacing h for a wiggle of size δ ~ σ); bracket 40 decades around it.
    let hbar = (x[n - 1] - x[0]) / (n - 1) as f64;
    let vbar = var.iter().sum::<f64>() / n as f64;
    let scale = hbar.powi(3) / vbar;
    let (mut lo, mut hi) = ((scale * 1e-20).ln(), (scale * 1e20).ln());
    match rule {
        Rule::ChiSquare => {
            // χ²(α) rises monotonically from 0 (interpolation) to the line's χ² > n
            for _ in 0..200 {
                let mid = 0.5 * (lo + hi);
                if sys.fit(y, &var, mid.exp()).chi2 < target {
                    lo = mid;
                } else {
                    hi = mid;
                }
                if hi - lo < 1e-10 {
                    break;
                }
            }
            sys.fit(y, &var, (0.5 * (lo + hi)).exp())
        }
        Rule::CrossValidation => {
            let score = |la: f64| {
                let s = sys.fit(y, &var, la.exp());
                let dof = s.residual_dof.max(1e-300);
                target * s.chi2 / (dof * dof)
            };
            let line_v = target * line.chi2 / ((target - 2.0) * (target - 2.0));
            minimise(lo, hi, &score, line_v).map_or(line, |la| sys.fit(y, &var, la.exp()))
        }
        Rule::Risk { correlation_length } => {
            // independent rows (ℓ below 1/40 of the closest spacing: neighbour weight e^(−800)):
            // the trace is tr H exactly
            let closest = x
                .windows(2)
                .map(|w| w[1] - w[0])
                .fold(f64::INFINITY, f64::min);
            let white = risk_minimum(&sys, x, y, &var, None, lo, hi, &line);
            if correlation_length < closest / 40.0 {
                return white.map_or(line, |la| sys.fit(y, &var, la.exp()));
            }
            // Either noise model, when wrong, undersmooths: independent rows read as a correlated
            // model look like signal at high frequency, correlated noise read as independent
            // looks like signal at low frequency. The larger of the two choices is the one the
            // true model would make.
            let pr = probes(x, sigma, correlation_length);
            let corr = risk_minimum(&sys, x, y, &var, Some(&pr), lo, hi, &line);
            match (white, corr) {
                (Some(a), Some(b)) => sys.fit(y, &var, a.max(b).exp()),
                _ => line,
            }
        }
    }
}

/// Minimum over ln α of the unbiased risk χ² + 2 tr(W H Σ) − n, the trace exact (tr H) for
/// independent rows or estimated with the probe vectors; None when the straight line wins.
#[allow(clippy::too_many_arguments)] // one private helper, called twice
fn risk_minimum(
    sys: &Reinsch,
    x: &[f64],
    y: &[f64],
    var: &[f64],
    probes: Option<&[Vec<f64>]>,
    lo: f64,
    hi: f64,
    line: &Smoothed,
) -> Option<f64> {
    let n = x.len();
    let target = n as f64;
    let quad = |e: &[f64], he: &[f64]| (0..n).map(|i| e[i] * he[i] / var[i]).sum::<f64>();
    let mean = |f: &dyn Fn(&[f64]) -> f64, pr: &[Vec<f64>]| {
        pr.iter().map(|e| f(e)).sum::<f64>() / pr.len() as f64
    };
    let score = |la: f64| {
        let alpha = la.exp();
        match probes {
            None => {
                let s = sys.fit(y, var, alpha);
                s.chi2 + 2.0 * s.edf - target
            }
            Some(pr) => {
                let (fac, _, _, chi2) = sys.solve(var, alpha);
                chi2 + 2.0 * mean(&|e| quad(e, &sys.apply(e, var, alpha, &fac)), pr) - target
            }
        }
    };
    let line_trace = match probes {
        None => 2.0,
        Some(pr) => mean(&|e| quad(e, &sys.line(x, e, var).values), pr),
    };
    minimise(lo, hi, &score, line.chi2 + 2.0 * line_trace - target)
}

/// Refits at a given α (the central fit's), for perturbed copies of the same rows.
pub fn fit_at(x: &[f64], y: &[f64], sigma: &[f64], alpha: f64) -> Smoothed {
    let var: Vec<f64> = sigma.iter().map(|s| s * s).collect();
    let sys = Reinsch::new(x, y, &var);
    if alpha.is_finite() {
        sys.fit(y, &var, alpha)
    } else {
        sys.line(x, y, &var)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dense_inverse_trace(x: &[f64], var: &[f64], alpha: f64) -> f64 {
        // tr H from the influence matrix built column by column (H e_k = fit of the unit vector)
        let n = x.len();
        (0..n)
            .map(|k| {
                let mut y = vec![0.0; n];
                y[k] = 1.0;
                Reinsch::new(x, &y, var).fit(&y, var, alpha).values[k]
            })
            .sum()
    }

    // The band recursion for tr H equals the trace of the influence matrix assembled column by
    // column (the same solver, no recursion): rounding only, 1e-9 relative.
    #[test]
    fn trace_by_band_recursion_matches_columns() {
        let x: Vec<f64> = (0..30)
            .map(|i| f64::from(i) * 0.1 + 0.01 * f64::from(i % 3))
            .collect();
        let var: Vec<f64> = (0..30).map(|i| 0.04 + 0.01 * f64::from(i % 4)).collect();
        let y: Vec<f64> = x.iter().map(|x| x.sin()).collect();
        for alpha in [1e-6, 1e-3, 1.0, 1e3] {
            let s = Reinsch::new(&x, &y, &var).fit(&y, &var, alpha);
            let t = dense_inverse_trace(&x, &var, alpha);
            assert!((s.edf / t - 1.0).abs() < 1e-9, "{alpha}: {} vs {t}", s.edf);
        }
    }

    // Limits (Reinsch 1967): α → 0 interpolates (edf → n, χ² → 0); α → ∞ gives the weighted
    // least-squares line (edf → 2). A cubic's penalty is not zero, a line's is: a line is
    // reproduced at any α (rounding, 1e-10).
    #[test]
    fn limits_and_lines() {
        let x: Vec<f64> = (0..40).map(|i| f64::from(i) * 0.05).collect();
        let var = vec![0.01; 40];
        let y: Vec<f64> = x.iter().map(|x| (3.0 * x).sin()).collect();
        let sys = Reinsch::new(&x, &y, &var);
        let tight = sys.fit(&y, &var, 1e-14);
        assert!(tight.edf > 39.99 && tight.chi2 < 1e-12);
        let loose = sys.fit(&y, &var, 1e14);
        assert!((loose.edf - 2.0).abs() < 1e-3);
        let line: Vec<f64> = x.iter().map(|x| 1.0 - 2.0 * x).collect();
        let s = fit_at(&x, &line, &[0.1; 40], 3.0);
        for (a, b) in s.values.iter().zip(&line) {
            assert!((a - b).abs() < 1e-10);
        }
    }

    // χ² = n is met (bisection to 1e-10 in ln α: χ² within 1e-6 of n), and every rule recovers a
    // smooth curve from white noise of σ = 0.05: interpolation would leave an RMS error of σ, an
    // MSE-optimal smoother about σ sqrt(edf/n) ≈ 0.3σ here; 0.6σ allows χ² = n its known
    // oversmoothing at the peaks (common practice, no source; the noise is a fixed deterministic
    // sequence, so the check is exact arithmetic, not a statistical one).
    #[test]
    fn rules_fit_noisy_data() {
        let n = 201;
        let x: Vec<f64> = (0..n).map(|i| f64::from(i) * 0.02).collect();
        let truth: Vec<f64> = x.iter().map(|x| (2.0 * x).sin() + 0.3 * x).collect();
        // deterministic noise: a scrambled sequence with unit variance (uniform on ±sqrt(3))
        let mut state = 0x9e37_79b9_7f4a_7c15u64;
        let noise: Vec<f64> = (0..n)
            .map(|_| {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                ((state >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0) * 3f64.sqrt()
            })
            .collect();
        let sigma = vec![0.05; n as usize];
        let y: Vec<f64> = truth
            .iter()
            .zip(&noise)
            .map(|(t, e)| t + 0.05 * e)
            .collect();
        for rule in [
            Rule::ChiSquare,
            Rule::CrossValidation,
            Rule::Risk {
                correlation_length: 0.0,
            },
        ] {
            let s = fit(&x, &y, &sigma, rule);
            if rule == Rule::ChiSquare {
                assert!((s.chi2 - n as f64).abs() < 1e-6 * n as f64, "{}", s.chi2);
            }
            assert!(s.edf > 3.0 && s.edf < 60.0, "{rule:?}: edf {}", s.edf);
            let rms = (s
                .values
                .iter()
                .zip(&truth)
                .map(|(a, b)| (a - b).powi(2))
                .sum::<f64>()
                / f64::from(n))
            .sqrt();
            assert!(rms < 0.6 * 0.05, "{rule:?}: {rms}");
        }
    }
}
