//! Regime diagnosis: which friction regime a scenario is in, and which formulas hold there.
//!
//! Thresholds (the README repeats them with their reasoning):
//! - energy-diffusion: δ = γ I_b/kT < 1 — less than kT is lost per orbit, so the energy
//!   distribution near the barrier is depleted and the rate is limited by energy supply.
//! - turnover: 1 ≤ δ < 10 — the depopulation factor A(δ) is between about 0.5 and 0.97, so neither
//!   limit holds to 5%.
//! - spatial-diffusion: δ ≥ 10 and γ/ω_b < 5 — A(δ) ≥ 0.97 and Kramers' λ₊/ω_b applies.
//! - overdamped: γ/ω_b ≥ 5 — Kramers' λ₊/ω_b is within 4% of the Smoluchowski ω_b/γ (1% at 10), so
//!   the overdamped (Smoluchowski) description and its exact MFPT hold. Also chosen when only D
//!   and no mass is given: the input itself is overdamped.

use serde::Serialize;

/// δ below which the energy-diffusion regime is named.
pub const DELTA_ENERGY_DIFFUSION: f64 = 1.0;
/// δ above which A(δ) ≥ 0.97.
pub const DELTA_SPATIAL: f64 = 10.0;
/// γ/ω_b above which Smoluchowski is within 4% of Kramers.
pub const GAMMA_OVERDAMPED: f64 = 5.0;
/// δ below which k_ED is within ~12% of k_MM (A = δ(1 − 0.82 sqrt δ)).
pub const DELTA_ED_VALID: f64 = 0.02;

/// The regime names.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum RegimeName {
    /// δ < 1
    EnergyDiffusion,
    /// 1 ≤ δ < 10
    Turnover,
    /// δ ≥ 10, γ/ω_b < 5
    SpatialDiffusion,
    /// γ/ω_b ≥ 5, or D-only input
    Overdamped,
}

impl RegimeName {
    /// The name as printed.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::EnergyDiffusion => "energy-diffusion",
            Self::Turnover => "turnover",
            Self::SpatialDiffusion => "spatial-diffusion",
            Self::Overdamped => "overdamped",
        }
    }
}

/// Names the regime from γ/ω_b and δ (both absent for D-only input).
pub fn classify(gamma_over_omega_b: Option<f64>, delta: Option<f64>) -> RegimeName {
    match (gamma_over_omega_b, delta) {
        (Some(g), _) if g >= GAMMA_OVERDAMPED => RegimeName::Overdamped,
        (Some(_), Some(d)) if d < DELTA_ENERGY_DIFFUSION => RegimeName::EnergyDiffusion,
        (Some(_), Some(d)) if d < DELTA_SPATIAL => RegimeName::Turnover,
        (Some(_), _) => RegimeName::SpatialDiffusion,
        (None, _) => RegimeName::Overdamped,
    }
}
