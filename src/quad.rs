//! Quadrature in log space for integrands like exp(±U/kT) that span hundreds of orders of
//! magnitude: composite Gauss–Legendre panels whose values are shifted by the panel minimum, the
//! panel count doubled until the result stops changing, and a spectral integration matrix for the
//! cumulative (inner) integrals of nested double integrals.
//!
//! Gauss–Legendre nodes by Newton iteration on P_n (Golub & Welsch give the same nodes; Abramowitz
//! & Stegun Table 25.4 lists them). The cumulative rule S_jk = ∫_{-1}^{t_j} ℓ_k(t) dt integrates the
//! degree-(n−1) interpolant through the panel's nodes exactly (Gauss–Legendre collocation, e.g.
//! Hairer & Wanner, Solving ODEs II, Sec. IV.5), so inner and outer integrands share one set of
//! function evaluations.

use std::sync::OnceLock;

/// Points per panel: a 10-point rule is exact to degree 19, so a panel a few thermal widths wide
/// already reaches 1e-12.
pub const NODES: usize = 10;

/// Nodes, weights on [-1, 1] and the cumulative matrix for [`NODES`] points.
pub struct Rule {
    /// nodes t_j
    pub t: [f64; NODES],
    /// weights w_j
    pub w: [f64; NODES],
    /// `S[j][k]` = ∫_{-1}^{t_j} ℓ_k
    pub s: [[f64; NODES]; NODES],
}

/// Gauss–Legendre nodes and weights for n points on [-1, 1].
pub fn gauss_legendre(n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut t = vec![0.0; n];
    let mut w = vec![0.0; n];
    for i in 0..n {
        // Tricomi's initial guess, then Newton on P_n
        let mut x = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 0.0;
        for _ in 0..100 {
            let (mut p0, mut p1) = (1.0, x);
            for k in 2..=n {
                let p2 = ((2 * k - 1) as f64 * x * p1 - (k - 1) as f64 * p0) / k as f64;
                p0 = p1;
                p1 = p2;
            }
            dp = n as f64 * (x * p1 - p0) / (x * x - 1.0);
            let dx = p1 / dp;
            x -= dx;
            if dx.abs() < 1e-16 {
                break;
            }
        }
        t[n - 1 - i] = x;
        w[n - 1 - i] = 2.0 / ((1.0 - x * x) * dp * dp);
    }
    (t, w)
}

/// The shared rule.
pub fn rule() -> &'static Rule {
    static RULE: OnceLock<Rule> = OnceLock::new();
    RULE.get_or_init(|| {
        let (tv, wv) = gauss_legendre(NODES);
        let mut t = [0.0; NODES];
        let mut w = [0.0; NODES];
        t.copy_from_slice(&tv);
        w.copy_from_slice(&wv);
        let lagrange = |k: usize, x: f64| -> f64 {
            (0..NODES)
                .filter(|&m| m != k)
                .map(|m| (x - t[m]) / (t[k] - t[m]))
                .product()
        };
        let mut s = [[0.0; NODES]; NODES];
        for j in 0..NODES {
            let half = 0.5 * (t[j] + 1.0);
            for (k, sk) in s[j].iter_mut().enumerate() {
                *sk = half
                    * (0..NODES)
                        .map(|m| w[m] * lagrange(k, -1.0 + half * (1.0 + t[m])))
                        .sum::<f64>();
            }
        }
        Rule { t, w, s }
    })
}

/// ln(e^a + e^b), with -inf as the empty sum.
#[inline]
pub fn log_add(a: f64, b: f64) -> f64 {
    if a == f64::NEG_INFINITY {
        return b;
    }
    if b == f64::NEG_INFINITY {
        return a;
    }
    let (hi, lo) = if a > b { (a, b) } else { (b, a) };
    hi + (lo - hi).exp().ln_1p()
}

/// A streaming log-sum-exp.
#[derive(Debug, Clone, Copy)]
pub struct LogSum {
    max: f64,
    sum: f64,
}

impl Default for LogSum {
    fn default() -> Self {
        Self {
            max: f64::NEG_INFINITY,
            sum: 0.0,
        }
    }
}

impl LogSum {
    /// Adds e^v.
    #[inline]
    pub fn add(&mut self, v: f64) {
        if v == f64::NEG_INFINITY {
            return;
        }
        if v > self.max {
            self.sum = self.sum * (self.max - v).exp() + 1.0;
            self.max = v;
        } else {
            self.sum += (v - self.max).exp();
        }
    }
    /// ln of the sum.
    pub fn ln(&self) -> f64 {
        if self.sum == 0.0 {
            f64::NEG_INFINITY
        } else {
            self.max + self.sum.ln()
        }
    }
}

/// Splits each segment between consecutive breakpoints into `per` equal panels.
pub fn panels(breaks: &[f64], per: usize) -> Vec<(f64, f64)> {
    let mut out = Vec::with_capacity(breaks.len() * per);
    for w in breaks.windows(2) {
        let (a, b) = (w[0], w[1]);
        if b <= a {
            continue;
        }
        for i in 0..per {
            let p = a + (b - a) * i as f64 / per as f64;
            let q = if i + 1 == per {
                b
            } else {
                a + (b - a) * (i + 1) as f64 / per as f64
            };
            out.push((p, q));
        }
    }
    out
}

/// Sorted, de-duplicated breakpoints clipped to [lo, hi] (which are always included).
pub fn breakpoints(lo: f64, hi: f64, extra: impl IntoIterator<Item = f64>) -> Vec<f64> {
    let mut b: Vec<f64> = extra
        .into_iter()
        .filter(|x| x.is_finite() && *x > lo && *x < hi)
        .collect();
    b.push(lo);
    b.push(hi);
    b.sort_by(f64::total_cmp);
    b.dedup();
    b
}

/// Result of a converged log-space integral.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LogResult {
    /// ln of the integral
    pub ln: f64,
    /// |ln(I_N) - ln(I_{N/2})| at the accepted level: an estimate of the relative error
    pub change: f64,
    /// panels per segment at the accepted level
    pub per_segment: usize,
}

/// Runs `level(per)` for per = start, 2 start, … until two successive ln-values differ by less than
/// `tol` (a relative error of the integral), up to `max_per`. Returns the last level's value even
/// when it did not converge (the caller reports `change`).
pub fn converge(
    start: usize,
    max_per: usize,
    tol: f64,
    mut level: impl FnMut(usize) -> f64,
) -> LogResult {
    let mut per = start;
    let mut prev = level(per);
    loop {
        let next_per = per * 2;
        let next = level(next_per);
        let change = if next.is_finite() && prev.is_finite() {
            (next - prev).abs()
        } else {
            f64::INFINITY
        };
        per = next_per;
        prev = next;
        if change < tol || per >= max_per {
            return LogResult {
                ln: next,
                change,
                per_segment: per,
            };
        }
    }
}

/// ln ∫_a^b exp(g(x)) dx for a smooth exponent g, on panels between `breaks` (which must start at a
/// and end at b).
pub fn log_integral_exp(g: &dyn Fn(f64) -> f64, breaks: &[f64], tol: f64) -> LogResult {
    let r = rule();
    converge(16, 1 << 16, tol, |per| {
        let mut acc = LogSum::default();
        for (p, q) in panels(breaks, per) {
            let half = 0.5 * (q - p);
            let mid = 0.5 * (p + q);
            for j in 0..NODES {
                acc.add((r.w[j] * half).ln() + g(mid + half * r.t[j]));
            }
        }
        acc.ln()
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // Abramowitz & Stegun Table 25.4 (n = 10): largest node 0.973906528517172, its weight
    // 0.066671344308688.
    #[test]
    fn nodes_match_handbook() {
        let (t, w) = gauss_legendre(10);
        assert!((t[9] - 0.973_906_528_517_172).abs() < 1e-14);
        assert!((w[9] - 0.066_671_344_308_688).abs() < 1e-14);
        assert!((w.iter().sum::<f64>() - 2.0).abs() < 1e-14);
    }

    // The cumulative matrix integrates polynomials of degree < NODES exactly (rounding only).
    #[test]
    fn cumulative_rule_is_exact_for_polynomials() {
        let r = rule();
        for j in 0..NODES {
            let x = r.t[j];
            let approx: f64 = (0..NODES).map(|k| r.s[j][k] * r.t[k].powi(5)).sum();
            let exact = (x.powi(6) - 1.0) / 6.0;
            assert!((approx - exact).abs() < 1e-13);
        }
    }

    // ∫_{-L}^{L} exp(-E x^2) = sqrt(pi/E) erf(sqrt(E) L); with E = 400, L = 1 erf is 1 to 1e-170,
    // so ln I = 0.5 ln(pi/400) (closed form).
    #[test]
    fn log_integral_of_a_sharp_gaussian() {
        let e = 400.0;
        let res = log_integral_exp(&|x: f64| -e * x * x + 300.0, &[-1.0, 1.0], 1e-13);
        assert!((res.ln - (300.0 + 0.5 * (std::f64::consts::PI / e).ln())).abs() < 1e-12);
    }
}
