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

/// ln k_Smoluchowski.
pub fn ln_smoluchowski(d_barrier: f64, curv_a: f64, curv_b: f64, eb: f64) -> f64 {
    (d_barrier * (curv_a * curv_b).sqrt() / (2.0 * std::f64::consts::PI)).ln() - eb
}

#[cfg(test)]
mod tests {
    use super::*;

    // Limits (Kramers 1940; PHYSICS.md §2): λ₊ → ω_b as γ → 0 and → ω_b²/γ as γ → ∞.
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
