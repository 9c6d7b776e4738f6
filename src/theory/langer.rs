//! Rates over a saddle of a two-coordinate surface in the harmonic approximation, kT = 1: the
//! reactant minimum's Hessian H_a, the saddle's Hessian H_b (one negative eigenvalue) and the
//! barrier ΔU = U_b − U_a.
//!
//! - **Overdamped Langer** (Langer, Ann. Phys. 54, 258 (1969); the Eyring–Kramers law as in
//!   Berglund, Markov Process. Relat. Fields 19, 459 (2013)):
//!   k = (|λ_u|/2π) sqrt(det H_a / |det H_b|) e^{−ΔU}, with λ_u the negative eigenvalue of D·H_b
//!   (real: D·H_b is similar to D^{1/2} H_b D^{1/2}).
//! - **Langer with inertia and a friction matrix**: for M ẍ = −∇U − ζ ẋ + noise with mass matrix M
//!   and friction matrix ζ = MΓ (symmetric positive semi-definite; Γ the friction-rate matrix),
//!   the motion near the saddle x = v e^{λt} obeys det(λ² M + λ ζ + H_b) = 0. For λ > 0 the
//!   smallest eigenvalue of Q(λ) = λ²M + λζ + H_b increases strictly (dQ/dλ = 2λM + ζ ≻ 0)
//!   from its negative value at λ = 0, so there is exactly one positive root λ₊, the unstable
//!   one. The rate is k = (λ₊/ω_u) k_HTST with the harmonic TST rate below, and since
//!   Π ω_a² = det H_a/det M and Π' ω_b² = |det H_b|/(det M ω_u²), the masses cancel:
//!   k = (λ₊/2π) sqrt(det H_a / |det H_b|) e^{−ΔU} (Langer 1969; Hänggi, Talkner & Borkovec,
//!   Rev. Mod. Phys. 62, 251 (1990), the multidimensional Kramers rate, from memory; the mass factor is 1: M enters through λ₊
//!   alone). For ζ → ∞, λ₊ → the positive root of λζv = −H_b v, i.e. |λ_u| with D = ζ⁻¹
//!   (Einstein, kT = 1): the overdamped formula. In one dimension λ₊ is Kramers'
//!   sqrt(γ²/4 + ω_b²) − γ/2.
//! - **Harmonic TST** (Vineyard, J. Phys. Chem. Solids 3, 121 (1957)):
//!   k = (1/2π) (ω_a,1 ω_a,2 / ω_b,stable) e^{−ΔU}, with ω² the eigenvalues of the
//!   mass-weighted Hessian M^{−1/2} H M^{−1/2}.
//!
//! Rates are returned as logarithms (barriers of hundreds of kT).

use crate::potential::surface::{DiffusionTensor, Sym2, sym_eigen};
use serde::Serialize;
use std::f64::consts::PI;
use thiserror::Error;

/// A 2x2 matrix, not necessarily symmetric (a friction-rate matrix).
pub type Mat2 = [[f64; 2]; 2];

/// Problems with the harmonic data.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum LangerError {
    /// H_a is not positive definite
    #[error("the reactant Hessian is not positive definite (eigenvalues {0:?})")]
    NotMinimum([f64; 2]),
    /// H_b does not have exactly one negative eigenvalue
    #[error("the saddle Hessian does not have exactly one negative eigenvalue (eigenvalues {0:?})")]
    NotSaddle([f64; 2]),
    /// a matrix that must be SPD is not
    #[error("the {0} is not symmetric positive definite")]
    NotPositiveDefinite(&'static str),
    /// ζ = MΓ is not symmetric positive semi-definite
    #[error("the friction matrix M·Γ is not symmetric positive semi-definite")]
    Friction,
    /// a value is NaN or infinite
    #[error("the {0} is not finite")]
    NotFinite(&'static str),
}

/// The harmonic data of one saddle crossing.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct HarmonicBarrier {
    /// H_a at the reactant minimum (kT per length²)
    pub reactant: Sym2,
    /// H_b at the saddle
    pub saddle: Sym2,
    /// ΔU = U_b − U_a in kT
    pub barrier: f64,
}

fn det(m: Mat2) -> f64 {
    m[0][0] * m[1][1] - m[0][1] * m[1][0]
}

fn mul(a: Mat2, b: Mat2) -> Mat2 {
    let mut c = [[0.0; 2]; 2];
    for (i, row) in c.iter_mut().enumerate() {
        for (j, x) in row.iter_mut().enumerate() {
            *x = a[i][0] * b[0][j] + a[i][1] * b[1][j];
        }
    }
    c
}

/// f(m) = V f(Λ) Vᵀ for a symmetric m.
fn sym_fn(m: Sym2, f: impl Fn(f64) -> f64) -> Sym2 {
    let (l, v) = sym_eigen(m);
    let (f0, f1) = (f(l[0]), f(l[1]));
    let e = |i: usize, j: usize| f0 * v[i][0] * v[j][0] + f1 * v[i][1] * v[j][1];
    [[e(0, 0), e(0, 1)], [e(1, 0), e(1, 1)]]
}

fn finite(m: Mat2, what: &'static str) -> Result<(), LangerError> {
    match m.iter().flatten().all(|x| x.is_finite()) {
        true => Ok(()),
        false => Err(LangerError::NotFinite(what)),
    }
}

fn spd(m: Sym2, what: &'static str) -> Result<(), LangerError> {
    finite(m, what)?;
    let ok = m[0][1] == m[1][0] && m[0][0] > 0.0 && det(m) > 0.0;
    ok.then_some(())
        .ok_or(LangerError::NotPositiveDefinite(what))
}

/// The negative eigenvalue λ_u of D·H_b and its unit eigenvector (the unstable direction of
/// the overdamped flow), from the symmetric D^{1/2} H_b D^{1/2}.
///
/// # Errors
/// D not SPD; H_b not finite or not a saddle.
pub fn unstable_overdamped(d: &DiffusionTensor, h_b: Sym2) -> Result<(f64, [f64; 2]), LangerError> {
    spd(d.0, "diffusion tensor")?;
    check_saddle(h_b)?;
    let r = sym_fn(d.0, f64::sqrt);
    let (l, w) = sym_eigen(mul(mul(r, h_b), r));
    let v = [
        r[0][0] * w[0][0] + r[0][1] * w[1][0],
        r[1][0] * w[0][0] + r[1][1] * w[1][0],
    ];
    let n = v[0].hypot(v[1]);
    Ok((l[0], [v[0] / n, v[1] / n]))
}

/// The unstable root λ₊ > 0 of det(λ²M + λMΓ + H_b) = 0, by bisection on the smallest
/// eigenvalue of Q(λ), which increases strictly for λ > 0 (see the module doc).
///
/// # Errors
/// M not SPD; MΓ not symmetric positive semi-definite; H_b not a saddle.
pub fn unstable_underdamped(
    mass: Sym2,
    friction_rate: Mat2,
    h_b: Sym2,
) -> Result<f64, LangerError> {
    spd(mass, "mass matrix")?;
    finite(friction_rate, "friction-rate matrix")?;
    check_saddle(h_b)?;
    let z = mul(mass, friction_rate);
    let scale = z.iter().flatten().fold(0.0_f64, |a, x| a.max(x.abs()));
    // symmetric up to the rounding of the product
    if (z[0][1] - z[1][0]).abs() > 1e-12 * scale {
        return Err(LangerError::Friction);
    }
    let zeta = [
        [z[0][0], 0.5 * (z[0][1] + z[1][0])],
        [0.5 * (z[0][1] + z[1][0]), z[1][1]],
    ];
    if sym_eigen(zeta).0[0] < -1e-12 * scale {
        return Err(LangerError::Friction);
    }
    let low = |l: f64| {
        let q = |i: usize, j: usize| l * l * mass[i][j] + l * zeta[i][j] + h_b[i][j];
        sym_eigen([[q(0, 0), q(0, 1)], [q(1, 0), q(1, 1)]]).0[0]
    };
    let (mut lo, mut hi) = (0.0, 1.0);
    while low(hi) <= 0.0 {
        lo = hi;
        hi *= 2.0;
    }
    // halving to the last bit of the bracket: at most ~1100 steps for any double bracket
    for _ in 0..1100 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if low(mid) <= 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Ok(0.5 * (lo + hi))
}

/// The squared frequencies (ascending, signed: negative for an unstable mode) of the
/// mass-weighted Hessian M^{−1/2} H M^{−1/2}.
///
/// # Errors
/// M not SPD, H not finite.
pub fn mass_weighted_frequencies(mass: Sym2, h: Sym2) -> Result<[f64; 2], LangerError> {
    spd(mass, "mass matrix")?;
    finite(h, "Hessian")?;
    let r = sym_fn(mass, |x| 1.0 / x.sqrt());
    Ok(sym_eigen(mul(mul(r, h), r)).0)
}

fn check_saddle(h_b: Sym2) -> Result<(), LangerError> {
    finite(h_b, "saddle Hessian")?;
    let l = sym_eigen(h_b).0;
    match l[0] < 0.0 && l[1] > 0.0 {
        true => Ok(()),
        false => Err(LangerError::NotSaddle(l)),
    }
}

impl HarmonicBarrier {
    /// Checks that H_a is a minimum's and H_b a saddle's Hessian.
    ///
    /// # Errors
    /// As described, or a non-finite value.
    pub fn new(reactant: Sym2, saddle: Sym2, barrier: f64) -> Result<Self, LangerError> {
        finite(reactant, "reactant Hessian")?;
        let l = sym_eigen(reactant).0;
        if l[0] <= 0.0 {
            return Err(LangerError::NotMinimum(l));
        }
        check_saddle(saddle)?;
        if !barrier.is_finite() {
            return Err(LangerError::NotFinite("barrier"));
        }
        Ok(Self {
            reactant,
            saddle,
            barrier,
        })
    }

    /// ln[sqrt(det H_a / |det H_b|)/(2π)] − ΔU, the part shared by the Langer rates.
    fn ln_common(&self) -> f64 {
        0.5 * (det(self.reactant) / det(self.saddle).abs()).ln() - (2.0 * PI).ln() - self.barrier
    }

    /// ln k of overdamped Langer with diffusion tensor `d`.
    ///
    /// # Errors
    /// D not SPD.
    pub fn ln_langer_overdamped(&self, d: &DiffusionTensor) -> Result<f64, LangerError> {
        let (l, _) = unstable_overdamped(d, self.saddle)?;
        Ok(l.abs().ln() + self.ln_common())
    }

    /// ln k of Langer with inertia: mass matrix `mass`, friction-rate matrix Γ (ζ = MΓ).
    ///
    /// # Errors
    /// As [`unstable_underdamped`].
    pub fn ln_langer(&self, mass: Sym2, friction_rate: Mat2) -> Result<f64, LangerError> {
        Ok(unstable_underdamped(mass, friction_rate, self.saddle)?.ln() + self.ln_common())
    }

    /// ln k of Vineyard's harmonic TST with mass matrix `mass`.
    ///
    /// # Errors
    /// M not SPD.
    pub fn ln_vineyard(&self, mass: Sym2) -> Result<f64, LangerError> {
        let a = mass_weighted_frequencies(mass, self.reactant)?;
        let b = mass_weighted_frequencies(mass, self.saddle)?;
        Ok(0.5 * (a[0].ln() + a[1].ln() - b[1].ln()) - (2.0 * PI).ln() - self.barrier)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rotated(l0: f64, l1: f64, th: f64) -> Sym2 {
        let (s, c) = th.sin_cos();
        [
            [l0 * c * c + l1 * s * s, (l0 - l1) * c * s],
            [(l0 - l1) * c * s, l0 * s * s + l1 * c * c],
        ]
    }

    /// λ₊ is a root of det(λ²M + λζ + H_b) (exact algebra up to rounding of O(10) terms), and
    /// tends to the overdamped |λ_u| with D = (MΓ)⁻¹ at strong friction, where
    /// λ₊ = |λ_u|(1 + O(|λ_u|/γ)): γ = 1e6 leaves a 1e-6 relative difference.
    #[test]
    fn underdamped_root_and_overdamped_limit() {
        let m = rotated(1.0, 2.5, 0.3);
        let h_b = rotated(-3.0, 5.0, -0.7);
        let gamma = 1.7;
        let g = [[gamma, 0.0], [0.0, gamma]];
        let l = unstable_underdamped(m, g, h_b).unwrap();
        let q = |i: usize, j: usize| l * l * m[i][j] + l * gamma * m[i][j] + h_b[i][j];
        assert!(det([[q(0, 0), q(0, 1)], [q(1, 0), q(1, 1)]]).abs() < 1e-12);
        assert!(l > 0.0);
        let big = 1e6;
        let lp = unstable_underdamped(m, [[big, 0.0], [0.0, big]], h_b).unwrap();
        // ζ = big·M, D = ζ⁻¹
        let zi = sym_fn(m, |x| 1.0 / (big * x));
        let (lu, _) = unstable_overdamped(&DiffusionTensor(zi), h_b).unwrap();
        assert!((lp / lu.abs() - 1.0).abs() < 1e-5, "{lp} {lu}");
    }

    /// Vineyard's product of frequencies equals the determinant form
    /// (ω_u/2π) sqrt(det H_a/|det H_b|) e^{−ΔU} (exact algebra, module doc).
    #[test]
    fn vineyard_equals_determinant_form() {
        let m = rotated(0.7, 1.9, 0.5);
        let b = HarmonicBarrier::new(rotated(2.0, 9.0, 0.2), rotated(-4.0, 6.0, 1.0), 7.0).unwrap();
        let w_u = mass_weighted_frequencies(m, b.saddle).unwrap()[0]
            .abs()
            .sqrt();
        let expect = w_u.ln() + b.ln_common();
        assert!((b.ln_vineyard(m).unwrap() - expect).abs() < 1e-12);
        // no friction: Langer is TST
        let zero = [[0.0; 2]; 2];
        assert!((b.ln_langer(m, zero).unwrap() - expect).abs() < 1e-12);
    }

    #[test]
    fn bad_inputs_are_refused() {
        let h = rotated(2.0, 3.0, 0.0);
        assert!(matches!(
            HarmonicBarrier::new(h, h, 1.0),
            Err(LangerError::NotSaddle(_))
        ));
        let s = rotated(-2.0, 3.0, 0.0);
        assert!(matches!(
            HarmonicBarrier::new(s, s, 1.0),
            Err(LangerError::NotMinimum(_))
        ));
        let skew = [[1.0, 0.5], [0.0, 1.0]];
        let m = rotated(1.0, 2.0, 0.4);
        assert_eq!(unstable_underdamped(m, skew, s), Err(LangerError::Friction));
    }
}
