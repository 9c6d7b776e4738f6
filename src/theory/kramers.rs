//! Kramers' rates in the spatial-diffusion regime (Kramers, Physica 7, 284 (1940); HTB 1990 Sec. IV).
//!
//! - k = (λ₊/ω_b) k_TST, λ₊ = sqrt(γ²/4 + ω_b²) − γ/2 (the barrier's reactive frequency).
//! - Smoluchowski limit (γ ≫ ω_b): k = D sqrt(U''(x_a)|U''(x_b)|) / (2π kT) e^{−E_b/kT}; with
//!   D(x) the barrier value D(x_b) is used (the flux is set at the barrier top).

/// λ₊ = sqrt(γ²/4 + ω_b²) − γ/2, written as ω_b²/(sqrt(γ²/4 + ω_b²) + γ/2) so it keeps full
/// precision when γ ≫ ω_b.
pub fn lambda_plus(gamma: f64, omega_b: f64) -> f64 {
    let h = 0.5 * gamma;
    omega_b * omega_b / ((h * h + omega_b * omega_b).sqrt() + h)
}

/// The Grote–Hynes reactive frequency for an exponential memory kernel K(t) = (γ/τ)e^{−t/τ}: the
/// largest positive root of τ λ³ + λ² + (γ − τ ω_b²) λ − ω_b² = 0 (Grote & Hynes, J. Chem. Phys.
/// 73, 2715 (1980); λ² + λ K̂(λ) = ω_b² with K̂(s) = γ/(1 + sτ)). Reduces to λ₊ as τ → 0.
pub fn lambda_grote_hynes(gamma: f64, omega_b: f64, tau: f64) -> f64 {
    let w2 = omega_b * omega_b;
    let f = |l: f64| ((tau * l + 1.0) * l + (gamma - tau * w2)) * l - w2;
    // f(0) = −ω_b² < 0 and f(ω_b) = γ ω_b > 0: the positive root lies in (0, ω_b]; bisection
    // to full precision (f is increasing there for the largest root)
    let (mut lo, mut hi) = (0.0, omega_b);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if f(mid) < 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// ln k_Smoluchowski.
pub fn ln_smoluchowski(d_barrier: f64, curv_a: f64, curv_b: f64, eb: f64) -> f64 {
    (d_barrier * (curv_a * curv_b).sqrt() / (2.0 * std::f64::consts::PI)).ln() - eb
}

#[cfg(test)]
mod tests {
    use super::*;

    // Limits (Kramers 1940; PHYSICS.md §2): λ₊ → ω_b as γ → 0 and → ω_b²/γ as γ → ∞.
    // Grote–Hynes: τ → 0 gives Kramers' λ₊ (the cubic's root tends to the quadratic's); a long
    // memory τ ≫ 1/ω_b freezes the friction and the frequency tends to ω_b (Grote & Hynes 1980).
    #[test]
    fn grote_hynes_limits() {
        let (g, w) = (3.0, 2.0);
        assert!((lambda_grote_hynes(g, w, 1e-9) / lambda_plus(g, w) - 1.0).abs() < 1e-7);
        assert!((lambda_grote_hynes(g, w, 1e6) / w - 1.0).abs() < 1e-5);
        // the root satisfies λ² + λ γ/(1 + λτ) = ω_b²
        let (t, l) = (0.4, lambda_grote_hynes(g, w, 0.4));
        assert!((l * l + l * g / (1.0 + l * t) - w * w).abs() < 1e-12);
    }

    #[test]
    fn reactive_frequency_limits() {
        let w = 2.3;
        assert!((lambda_plus(1e-9, w) / w - 1.0).abs() < 1e-9);
        let g = 1e7;
        assert!((lambda_plus(g, w) / (w * w / g) - 1.0).abs() < 1e-12);
        // direct formula at a moderate value
        let g = 1.7;
        let direct = (g * g / 4.0 + w * w).sqrt() - g / 2.0;
        assert!((lambda_plus(g, w) - direct).abs() < 1e-14);
    }
}
