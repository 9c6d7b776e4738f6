//! The Pollak–Grabert–Hänggi (PGH) turnover rate for Ohmic friction and for the exponential memory
//! kernel K(t) = (γ/τ)e^{−t/τ}: the energy Δ that the unstable normal mode loses to the bath in one
//! excursion into the well, and the rate built on it.
//!
//! Construction (Pollak, Grabert & Hänggi, J. Chem. Phys. 91, 4073 (1989); the paper's text was
//! not available to us, so each step below is derived from the model Hamiltonian it starts from,
//! system plus bilinearly coupled harmonic bath, and checked in its limits): the system with its
//! harmonic bath is diagonalised at the barrier top. The unstable normal mode ρ has frequency λ‡
//! (for Ohmic friction Kramers' λ₊ = sqrt(γ²/4 + ω_b²) − γ/2) and its share of the system
//! coordinate is u₀₀, with u₀₀² = [1 + ½(γ̂(λ‡)/λ‡ + γ̂'(λ‡))]⁻¹ = 2λ‡/(2λ‡ + γ) for constant
//! γ̂ = γ. The nonlinear part of the potential, V₁(q) = U(x_b + q) − U_b + ½ m ω_b² q², is the only
//! coupling between ρ and the stable modes. To lowest order in it:
//!
//! - ρ moves with the stable modes held at rest, in the potential −½λ‡²ρ² + V₁(u₀₀ρ) (relaxing the
//!   bath would change the force on it only at second order in V₁').
//!   Written for the displacement r = u₀₀ρ/√m along x this is an orbit of mass M = m/u₀₀² in
//!   W(r) = U(x_b + r) − U_b + ½ c r², c = m(ω_b² − λ‡²/u₀₀²) = mγλ‡/2, at the barrier energy W = 0:
//!   from the barrier top into the well, to its turning point, and back.
//! - The force −u_j0 V₁'(r(t))/√m on each stable mode j transfers ½|F̃_j(λ_j)|² to it. Summed with
//!   the spectral weight Σ_j u_j0² δ(ω − λ_j) = (2ω/π) Im χ̂(−iω), χ̂(s) = 1/(s² − ω_b² + γs), this is
//!   Δ = (γ/πm) ∫₀^∞ dω ω² |Ṽ₁'(ω)|² / [(ω² + λ‡²)(ω² + (λ‡ + γ)²)].
//! - The orbit's equation of motion gives V₁'(r) = M(λ‡² r − r̈), so Ṽ₁' = M(λ‡² + ω²) r̃ and
//!   Δ = (γM²/πm) ∫₀^∞ dω |ṙ̃(ω)|² (ω² + λ‡²)/(ω² + Λ²), Λ = λ‡ + γ. By Parseval this is
//!   Δ = (γM²/m) ∫ g(t)² dt with g the velocity ṙ passed through the filter (s + λ‡)/(s + Λ), that
//!   is ġ = −Λ g + r̈ + λ‡ ṙ: g is the source r̈ + λ‡ṙ smoothed by the positive kernel e^{−Λt}, so
//!   Δ keeps full precision at strong friction, where the frequency-domain weight is ~(λ‡/Λ)² ≪ 1
//!   and a subtraction would cancel.
//! - As γ → ∞ (Λ far above the orbit's frequencies) g → (r̈ + λ‡ṙ)/Λ and
//!   Δ → (M²/γm) ∫(r̈² + λ‡²ṙ²) dt, a finite multiple of E_b: 27/35 E_b for the cubic well.
//! - As γ → 0, u₀₀ → 1, Λ → λ‡ → ω_b and Δ → γ m ∫ṙ² dt = γ I_b, Mel'nikov's energy loss.
//! - Memory, K̂(s) = γ/(1 + sτ): λ‡ is the Grote–Hynes root, u₀₀² = 2λ‡/(2λ‡ + K̂(λ‡) + λ‡K̂'(λ‡))
//!   (the same residue argument), c = (mλ‡/2)(K̂(λ‡) − λ‡K̂'(λ‡)), and the spectral weight is
//!   (2ω/π) Im χ̂ with χ̂(s) = 1/(s² − ω_b² + sK̂(s)). Writing τs³ + s² + (γ − τω_b²)s − ω_b² =
//!   τ(s − λ‡)(s² + αs + β), α = λ‡ + 1/τ, β = ω_b²/(τλ‡), this becomes
//!   Δ = (γM²/πmτ²) ∫₀^∞ dω ω²|r̃(ω)|² (ω² + λ‡²)/[(β − ω²)² + α²ω²], which tends to the Ohmic
//!   form as τ → 0 (τβ → ω_b²/λ‡ = λ‡ + γ). It is evaluated in the frequency domain (below).
//!
//! The rate is k_PGH = Υ (λ‡/ω_b) k_TST (Υ k_Kramers, or Υ k_GH with memory) with the depopulation
//! factor
//! Υ = exp[(1/π) ∫ dy ln(1 − e^{−(Δ/4kT)(1 + y²)})/(1 + y²)], which is A(δ) of [`super::turnover`] at
//! δ = Δ/kT (PGH 1989).
//!
//! Numerics: the turning point of W by Brent's method; the half orbit by fourth-order Runge–Kutta
//! on a uniform time grid (Newton's equation near the turning point, where the velocity vanishes,
//! then the energy equation ṙ = −sqrt(−2W/M), which is stable as the orbit creeps up to the
//! saddle), down to r = 1e-4 of the turning point, where W is quadratic to 1e-4 and the orbit is
//! continued analytically as r e^{−λ‡t}. The filter and ∫g² are integrated exactly for a source
//! that is linear between grid points (so fast e^{−Λt} transients cost nothing however large Λh);
//! the error is that of the linear interpolation, second order in the step, which is 1/(400 ω_max)
//! with ω_max the fastest local frequency: Δ is good to about 1e-6 (checked against mpmath for the
//! cubic well; the memory path to 1e-5 against mpmath, free and reflected). A wall behind the well
//! at the barrier energy reflects the orbit: ṙ flips, and g jumps by the same amount (the impulse
//! in r̈). The turning point is searched on 4000 points and ω_max on 400, so a feature of W
//! narrower than 1/4000 of the orbit could be missed; smooth profiles and splines of ordinary
//! tables have none.

use super::kramers;
use crate::potential::Potential;
use roots::{SimpleConvergency, find_root_brent};
use serde::Serialize;
use thiserror::Error;

/// Time steps per radian of the fastest local motion: the second-order filter and trapezoid errors
/// are then ~(1/400)²/12 ≈ 5e-7 relative.
const STEPS_PER_RADIAN: f64 = 400.0;
/// The orbit is continued analytically below this fraction of the turning point, where W is
/// quadratic to this relative accuracy.
const TAIL_FRACTION: f64 = 1e-4;
/// Most steps for the half orbit (24 bytes each): it lasts about 10/λ‡ in steps of 1/(400 ω_max),
/// so this allows ω_max/λ‡ up to about 500; a profile with faster local motion is reported rather
/// than ground through.
const MAX_STEPS: usize = 2_000_000;

/// Why no energy loss could be computed.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum PghError {
    /// The unstable mode's potential W does not fall below the barrier energy next to the barrier.
    #[error(
        "the PGH orbit does not start: the unstable mode's potential is not below the barrier next to it"
    )]
    NoOrbit,
    /// W rises to the barrier energy again on the way back (a feature the search stepped over).
    #[error(
        "the PGH orbit is blocked: the unstable mode's potential reaches the barrier energy inside the orbit"
    )]
    Blocked,
    /// The orbit's turning point is a stationary point of W (it would take forever to reach).
    #[error("the PGH orbit turns at a stationary point of the potential of mean force")]
    StationaryTurningPoint,
    /// The orbit needs more than 2 000 000 time steps.
    #[error("the PGH orbit needs more than {MAX_STEPS} time steps (time scales too far apart)")]
    TooManySteps,
    /// Non-finite values along the orbit.
    #[error("non-finite values along the PGH orbit")]
    NotFinite,
}

/// The energy loss and the quantities behind it.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct EnergyLoss {
    /// Δ/kT
    pub delta: f64,
    /// λ‡ (Kramers' λ₊ for Ohmic friction)
    pub lambda: f64,
    /// u₀₀²
    pub u00_squared: f64,
    /// the turning point of the orbit in x (the wall if the orbit reaches it)
    pub turning_point: f64,
    /// whether the orbit is reflected by the wall
    pub reflected: bool,
    /// time steps of the half orbit
    pub steps: usize,
}

/// One step of ġ = −Λg + f with f linear from f₀ to f₁ over the step h.
struct Step {
    lam: f64,
    h: f64,
    /// Λh
    x: f64,
    /// e^{−x}
    e: f64,
    /// 1 − e^{−x}
    one_minus_e: f64,
    /// weights of f₀ and f₁ in g(h) = e^{−x} g₀ + a₀ f₀ + a₁ f₁
    a0: f64,
    a1: f64,
}

impl Step {
    /// Below this Λh the trapezoidal rule on g² is used: its error (Λh)²/12 < 1e-7 is below the
    /// interpolation error, while the closed form would lose ε/(Λh)² to cancellation.
    const TRAPEZOID_BELOW: f64 = 1e-3;

    fn new(lam: f64, h: f64) -> Self {
        let x = lam * h;
        let e = (-x).exp();
        let one_minus_e = -(-x).exp_m1();
        let phi = one_minus_e / x;
        Self {
            lam,
            h,
            x,
            e,
            one_minus_e,
            a0: (phi - e) / lam,
            a1: (1.0 - phi) / lam,
        }
    }

    /// g(h) and ∫₀^h g² dτ from g(0) = `g0`.
    fn advance(&self, g0: f64, f0: f64, f1: f64) -> (f64, f64) {
        let g1 = self.e * g0 + self.a0 * f0 + self.a1 * f1;
        (g1, self.square_integral(g0, g1, f0, f1))
    }

    /// ∫₀^h g(τ)² dτ from g(0) = `g0` to g(h) = `g1`: g = C e^{−Λτ} + P + Qτ with Q = s/Λ, P = (f₀ − Q)/Λ,
    /// C = g₀ − P, s = (f₁ − f₀)/h (exact, so a fast transient after the wall's jump is integrated
    /// however coarse the step is against 1/Λ).
    fn square_integral(&self, g0: f64, g1: f64, f0: f64, f1: f64) -> f64 {
        let (l, h) = (self.lam, self.h);
        if self.x < Self::TRAPEZOID_BELOW {
            return 0.5 * h * (g0 * g0 + g1 * g1);
        }
        let q = (f1 - f0) / (h * l);
        let p = (f0 - q) / l;
        let c = g0 - p;
        let i_ee = self.one_minus_e * (1.0 + self.e) / (2.0 * l); // ∫e^{−2Λτ}
        let i_e = self.one_minus_e / l; // ∫e^{−Λτ}
        let i_te = (self.one_minus_e - self.x * self.e) / (l * l); // ∫τe^{−Λτ}
        c * c * i_ee
            + 2.0 * c * (p * i_e + q * i_te)
            + h * (p * p + p * q * h + q * q * h * h / 3.0)
    }
}

/// γ̂(λ) and λγ̂'(λ) for the kernel K̂(s) = γ/(1 + sτ) (τ = 0: Ohmic).
fn kernel_at(gamma: f64, tau: f64, lambda: f64) -> (f64, f64) {
    let d = 1.0 + lambda * tau;
    (gamma / d, -lambda * gamma * tau / (d * d))
}

/// u₀₀² = [1 + ½(γ̂(λ‡)/λ‡ + γ̂'(λ‡))]⁻¹, the unstable mode's share of the system coordinate
/// (2λ‡/(2λ‡ + γ) for Ohmic friction, τ = 0).
pub fn u00_squared(gamma: f64, tau: f64, lambda: f64) -> f64 {
    let (g, lg) = kernel_at(gamma, tau, lambda);
    2.0 * lambda / (2.0 * lambda + g + lg)
}

/// The energy loss Δ/kT along the unstable mode's orbit into the well.
///
/// `barrier` and `kappa_b` = |U''(x_b)| describe the barrier top; `turning` is the far turning point
/// of the bare orbit at the barrier energy (the landscape's, which is `wall` when U stays below
/// U_b up to the reflecting end behind the well); `mass` m and `gamma` in the scenario's internal
/// units (kT = 1), with `memory_time` τ for the kernel γ/(1 + sτ) (`None`: Ohmic). W ≥ U − U_b, so
/// the orbit turns between the barrier and `turning`.
///
/// # Errors
/// See [`PghError`].
#[allow(clippy::too_many_arguments)]
pub fn energy_loss(
    pot: &dyn Potential,
    mass: f64,
    gamma: f64,
    memory_time: Option<f64>,
    barrier: f64,
    kappa_b: f64,
    turning: f64,
    wall: f64,
) -> Result<EnergyLoss, PghError> {
    let s = (turning - barrier).signum();
    let wb = (kappa_b / mass).sqrt();
    let tau = memory_time.unwrap_or(0.0);
    let lam = if tau > 0.0 {
        kramers::lambda_grote_hynes(gamma, wb, tau)
    } else {
        kramers::lambda_plus(gamma, wb)
    };
    let u00sq = u00_squared(gamma, tau, lam);
    let big_m = mass / u00sq;
    // κ_b − Mλ‡² = m(ω_b² − λ‡²/u₀₀²) with ω_b² = λ‡² + λ‡γ̂(λ‡)
    let (g_hat, lam_g_hat_prime) = kernel_at(gamma, tau, lam);
    let c = 0.5 * mass * lam * (g_hat - lam_g_hat_prime);
    let ub = pot.u(barrier);
    let w = |r: f64| pot.u(barrier + s * r) - ub + 0.5 * c * r * r;
    let dw = |r: f64| s * pot.du(barrier + s * r) + c * r;
    let d2w = |r: f64| pot.d2u(barrier + s * r) + c;
    let r_bare = (turning - barrier).abs();
    let at_wall = (turning - wall).abs() <= 1e-12 * r_bare;
    if !(r_bare > 0.0 && big_m.is_finite() && lam > 0.0) {
        return Err(PghError::NotFinite);
    }

    // the first zero of W away from the barrier (the bare turning point at the latest), or the wall
    let n = 4000;
    let mut prev = r_bare / f64::from(n);
    if w(prev) >= 0.0 {
        return Err(PghError::NoOrbit);
    }
    let mut turn = None;
    for i in 2..=n {
        let r = r_bare * f64::from(i) / f64::from(n);
        if w(r) >= 0.0 || (i == n && !at_wall) {
            let mut conv = SimpleConvergency {
                eps: 1e-15 * r_bare,
                max_iter: 500,
            };
            // W(r_bare) ≥ 0 up to rounding when the bare orbit turns there
            let root = if w(r) >= 0.0 {
                find_root_brent(prev, r, &w, &mut conv).unwrap_or(r)
            } else {
                r
            };
            turn = Some(root);
            break;
        }
        prev = r;
    }
    let (r_t, v0, reflected) = match turn {
        Some(r) => {
            // a turning point where W' vanishes is never reached
            if dw(r) * r <= 1e-9 * kappa_b * r * r {
                return Err(PghError::StationaryTurningPoint);
            }
            (r, 0.0, false)
        }
        None => (r_bare, -(-2.0 * w(r_bare) / big_m).sqrt(), true),
    };

    // the fastest local frequency along the orbit
    let mut omega2 = lam * lam;
    for i in 0..=400 {
        let r = r_t * f64::from(i) / 400.0;
        omega2 = omega2.max(d2w(r).abs() / big_m);
    }
    let h = 1.0 / (omega2.sqrt() * STEPS_PER_RADIAN);
    let acc = |r: f64| -dw(r) / big_m;
    let speed = |r: f64| -(-2.0 * w(r) / big_m).max(0.0).sqrt();

    // the outgoing half orbit from the turning point (t = 0) to the barrier: (r, ṙ, r̈) per step
    let mut path: Vec<Point> = vec![(r_t, v0, acc(r_t))];
    let (mut r, mut v) = (r_t, v0);
    // Newton's equation while the velocity is small, then the energy equation
    while r > 0.5 * r_t {
        let (k1r, k1v) = (v, acc(r));
        let (k2r, k2v) = (v + 0.5 * h * k1v, acc(r + 0.5 * h * k1r));
        let (k3r, k3v) = (v + 0.5 * h * k2v, acc(r + 0.5 * h * k2r));
        let (k4r, k4v) = (v + h * k3v, acc(r + h * k3r));
        r += h / 6.0 * (k1r + 2.0 * k2r + 2.0 * k3r + k4r);
        v += h / 6.0 * (k1v + 2.0 * k2v + 2.0 * k3v + k4v);
        path.push((r, v, acc(r)));
        if path.len() > MAX_STEPS {
            return Err(PghError::TooManySteps);
        }
        if !(r.is_finite() && v.is_finite()) || r > r_t * (1.0 + 1e-6) {
            return Err(PghError::NotFinite);
        }
    }
    while r > TAIL_FRACTION * r_t {
        let k1 = speed(r);
        let k2 = speed(r + 0.5 * h * k1);
        let k3 = speed(r + 0.5 * h * k2);
        let k4 = speed(r + h * k3);
        r += h / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4);
        if !r.is_finite() {
            return Err(PghError::NotFinite);
        }
        // W ≥ 0 here would stop the orbit (speed 0) and the loop would run to MAX_STEPS
        if w(r) >= 0.0 || w(r).is_nan() {
            return Err(PghError::Blocked);
        }
        path.push((r, speed(r), acc(r)));
        if path.len() > MAX_STEPS {
            return Err(PghError::TooManySteps);
        }
    }
    let r_end = path.last().map_or(r_t, |p| p.0);
    let int = if tau * omega2.sqrt() > MEMORY_NEGLIGIBLE {
        memory_integral(&path, h, v0, r_end, lam, tau, wb)
    } else {
        ohmic_integral(&path, h, v0, reflected, r_end, lam, gamma)
    };
    let delta = gamma * big_m * big_m / mass * int;
    if !(delta.is_finite() && delta > 0.0) {
        return Err(PghError::NotFinite);
    }
    Ok(EnergyLoss {
        delta,
        lambda: lam,
        u00_squared: u00sq,
        turning_point: barrier + s * r_t,
        reflected,
        steps: path.len(),
    })
}

/// One orbit point: (r, ṙ, r̈) on the outgoing half, t = 0 at the turning point or wall.
type Point = (f64, f64, f64);

/// ∫g² dt for Ohmic friction, g the orbit's velocity through the filter (s + λ‡)/(s + Λ).
fn ohmic_integral(
    path: &[Point],
    h: f64,
    v0: f64,
    reflected: bool,
    r_end: f64,
    lam: f64,
    gamma: f64,
) -> f64 {
    // the filter ġ = −Λg + f, f = r̈ + λṙ, over the whole orbit (incoming half: r(−t) = r(t),
    // ṙ(−t) = −ṙ(t)); exact for f linear between grid points
    let big_l = lam + gamma;
    let f_in = |p: &Point| p.2 - lam * p.1;
    let f_out = |p: &Point| p.2 + lam * p.1;
    // incoming analytic tail r = r_end e^{λt}: f = 2λ² r, g = 2λ² r/(Λ + λ), ∫g² = g²/(2λ)
    let mut g = 2.0 * lam * lam * r_end / (big_l + lam);
    let mut int = g * g / (2.0 * lam);
    let step = Step::new(big_l, h);
    let mut f_prev = f_in(&path[path.len() - 1]);
    for p in path.iter().rev().skip(1) {
        let f = f_in(p);
        let (g_new, sq) = step.advance(g, f_prev, f);
        int += sq;
        g = g_new;
        f_prev = f;
    }
    if reflected {
        // ṙ flips from +|v0| to −|v0| at the wall: the impulse in r̈ moves g by the same amount
        g -= 2.0 * v0.abs();
    }
    let mut f_prev = f_out(&path[0]);
    for p in path.iter().skip(1) {
        let f = f_out(p);
        let (g_new, sq) = step.advance(g, f_prev, f);
        int += sq;
        g = g_new;
        f_prev = f;
    }
    // outgoing analytic tail: f = r̈ + λṙ = 0 for r e^{−λt}, so g decays as e^{−Λt}
    int + g * g / (2.0 * big_l)
}

/// Gauss–Legendre points per frequency panel.
const FREQ_NODES: usize = 10;
/// Ratio of consecutive frequency panel ends: a smooth integrand changes little across a panel,
/// and an orbit whose |r̃|² oscillates (features far apart in time) still gets a few nodes per
/// oscillation.
const FREQ_RATIO: f64 = 1.2;
/// Memory this short against the orbit's fastest period changes Δ by O(τω_max) < 1e-9: the Ohmic
/// path is used (as the simulation treats memory below 1e-9 dt).
const MEMORY_NEGLIGIBLE: f64 = 1e-9;

/// The frequency-domain form for the exponential memory kernel K̂(s) = γ/(1 + sτ): ∫₀^∞ ω²|r̃(ω)|²
/// (ω² + λ‡²)/[(ω_b²/λ‡ − τω²)² + (1 + τλ‡)²ω²] dω / π, the module doc's weight multiplied through
/// by τ² (τβ = ω_b²/λ‡, τα = 1 + τλ‡), so no τ overflows; γ M²/m times it is Δ. r̃ is the cosine
/// transform of the even orbit by the trapezoidal rule on the orbit's grid, carried on to infinity
/// along the analytic tail r_end e^{−λ‡t} as a geometric series (so the sum is spectrally accurate
/// for a smooth orbit), less the aliases of the kink at a wall, whose transform falls like
/// −2ṙ(0⁺)/ω² (summed in closed form). The frequency integral runs over geometric panels from 1e-4
/// min(λ‡, √β) (below which the integrand ∝ ω² is negligible) to π/(4h), a quarter of the grid's
/// Nyquist frequency, with breakpoints α/2, α, 2α, … either side of a sharp resonance at √β (α <
/// √β). Beyond π/(4h) a smooth orbit contributes nothing, and a reflected one the jump of ṙ at the
/// wall, |ṙ̃|² → 4v0²/ω², integrated with the same weight.
fn memory_integral(
    path: &[Point],
    h: f64,
    v0: f64,
    r_end: f64,
    lam: f64,
    tau: f64,
    wb: f64,
) -> f64 {
    let b_s = wb * wb / lam; // τβ
    let a_s = 1.0 + tau * lam; // τα
    let (alpha, root_beta) = (a_s / tau, (b_s / tau).sqrt());
    let t_end = h * (path.len() - 1) as f64;
    let decay = (-lam * h).exp();
    let transform = |w: f64| -> f64 {
        // Σ r_k cos(kθ) by rotating e^{iθ} (error growing like kε, not like k/sin θ)
        let (c1, s1) = ((w * h).cos(), (w * h).sin());
        let (mut c, mut sn) = (1.0, 0.0);
        let mut sum = 0.5 * path[0].0;
        for p in path.iter().skip(1) {
            let cn = c * c1 - sn * s1;
            sn = sn * c1 + c * s1;
            c = cn;
            sum += p.0 * c;
        }
        // the grid goes on along the tail r_end e^{−λ‡(t − T)}: Σ_{j≥1} r_end Re[e^{iωT} z^j] with
        // z = e^{(−λ‡+iω)h} is r_end Re[e^{iωT} z/(1 − z)], and z/(1 − z) = 1/(1 − z) − 1
        // 1 − z, its real part without cancellation: 1 − e^{−λh} cos ωh
        let (dr, di) = (
            -(-lam * h).exp_m1() * c1 + 2.0 * (0.5 * w * h).sin().powi(2),
            -decay * s1,
        );
        let n2 = dr * dr + di * di;
        let (gr, gi) = (dr / n2 - 1.0, -di / n2);
        let (ct, st) = ((w * t_end).cos(), (w * t_end).sin());
        let tail = r_end * (ct * gr - st * gi);
        // the kink at a wall (ṙ(0⁺) = v0, r̃ ~ −2v0/ω²) aliases into the sum from ω + 2πn/h, n ≠ 0:
        // Σ −2v0/(ω + 2πn/h)² = −2v0 [h²/(4 sin²(ωh/2)) − 1/ω²] (Σ_n 1/(n + x)² = π²/sin²πx)
        let y = 0.5 * w * h;
        let alias = if y < 1e-3 {
            h * h / 12.0 + w * w * h.powi(4) / 240.0
        } else {
            h * h / (4.0 * y.sin().powi(2)) - 1.0 / (w * w)
        };
        2.0 * (h * (sum + tail) + v0 * alias)
    };
    let weight = |w: f64| {
        let d = b_s - tau * w * w;
        (w * w + lam * lam) / (d * d + a_s * a_s * w * w)
    };
    let integrand = |w: f64| {
        let rt = transform(w);
        w * w * rt * rt * weight(w)
    };
    let top = std::f64::consts::PI / (4.0 * h);
    let mut cuts = vec![1e-4 * lam.min(root_beta), top];
    if alpha < root_beta {
        for j in [
            -64.0, -16.0, -4.0, -2.0, -1.0, -0.5, 0.0, 0.5, 1.0, 2.0, 4.0, 16.0, 64.0,
        ] {
            cuts.push(root_beta + j * 0.5 * alpha);
        }
    }
    let below: Vec<f64> = cuts.iter().copied().filter(|&c| c <= top).collect();
    let mut total = panels(integrand, &below);
    if v0 != 0.0 {
        // the tail falls like ω⁻⁴ beyond max(α, √β); 1e4 times further leaves < 1e-12 of it
        cuts.push(1e4 * top.max(alpha).max(root_beta));
        let above: Vec<f64> = cuts.iter().copied().filter(|&c| c >= top).collect();
        let tail = |w: f64| 4.0 * v0 * v0 / (w * w) * weight(w);
        total += panels(tail, &above);
    }
    total / std::f64::consts::PI
}

/// ∫ f from the smallest to the largest of `cuts`, by Gauss–Legendre on geometric panels (ratio
/// [`FREQ_RATIO`]) that also end at every cut in between.
fn panels(f: impl Fn(f64) -> f64, cuts: &[f64]) -> f64 {
    let mut cuts: Vec<f64> = cuts.iter().copied().filter(|c| *c > 0.0).collect();
    cuts.sort_by(f64::total_cmp);
    let (Some(&first), Some(&last)) = (cuts.first(), cuts.last()) else {
        return 0.0;
    };
    let (t, wts) = crate::quad::gauss_legendre(FREQ_NODES);
    let mut total = 0.0;
    let mut lo = first;
    while lo < last {
        let next_cut = cuts.iter().copied().find(|&c| c > lo).unwrap_or(last);
        let hi = (lo * FREQ_RATIO).min(next_cut);
        let (mid, half) = (0.5 * (lo + hi), 0.5 * (hi - lo));
        total += half
            * t.iter()
                .zip(&wts)
                .map(|(ti, wi)| wi * f(mid + half * ti))
                .sum::<f64>();
        lo = hi;
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::potential::family::Family;

    fn cubic(eb: f64) -> Family {
        Family::Cubic {
            eb,
            l: 1.5,
            domain: (-2.0, 2.0),
        }
    }

    // Weak friction: Δ → γ I_b with I_b = 36 E_b/(5 ω_b) for the cubic well (Kramers 1940; HTB
    // 1990 Sec. IV; the closed form is in PHYSICS.md §10). The correction is O(γ/ω_b) = 1e-5 here,
    // the discretisation ~1e-6: 1e-4.
    #[test]
    fn weak_friction_energy_loss_is_gamma_times_action() {
        let (eb, m) = (6.0, 1.0);
        let p = cubic(eb);
        let kb = p.d2u(1.0).abs();
        let wb = (kb / m).sqrt();
        let g = 1e-5 * wb;
        let el = energy_loss(&p, m, g, None, 1.0, kb, -0.5, -2.0).unwrap();
        let ib = 36.0 * eb / (5.0 * wb);
        assert!(
            (el.delta / (g * ib) - 1.0).abs() < 1e-4,
            "{}",
            el.delta / (g * ib)
        );
        assert!(!el.reflected);
        // the bare orbit turns at x = −L/3 = −0.5
        assert!((el.turning_point + 0.5).abs() < 1e-4);
    }

    // u₀₀² from its definition: the residue of χ̂(s) = 1/(s² − ω_b² + γs) at s = λ‡ is
    // 1/(2λ‡ + γ), and that of u₀₀²/(s² − λ‡²) is u₀₀²/(2λ‡) (common practice, no source).
    #[test]
    fn u00_is_the_residue_ratio() {
        let (g, wb) = (2.5, 1.3);
        let l = kramers::lambda_plus(g, wb);
        assert!((u00_squared(g, 0.0, l) - 2.0 * l / (2.0 * l + g)).abs() < 1e-15);
        assert!((l * l + g * l - wb * wb).abs() < 1e-12);
        // with memory: the residue of 1/(s² − ω_b² + sγ/(1 + sτ)) at λ_r, by a central difference
        // of the denominator's derivative (step 1e-6: error ~1e-12)
        let tau = 0.7;
        let lr = kramers::lambda_grote_hynes(g, wb, tau);
        let den = |z: f64| z * z - wb * wb + z * g / (1.0 + z * tau);
        let d = (den(lr + 1e-6) - den(lr - 1e-6)) / 2e-6;
        assert!((u00_squared(g, tau, lr) - 2.0 * lr / d).abs() < 1e-8);
    }

    // One filter step against its closed form g = C e^{−Λτ} + P + Qτ integrated by Simpson's rule on
    // 20 000 panels (error ~(Λh/20 000)⁴ ≪ 1e-12), from Λh far below to far above 1, with a jump-like
    // start g₀ far from the source's track (the wall's transient); the source is the line
    // f = 2 − 1.5t, as smooth as an orbit's. Common practice, no source.
    #[test]
    fn filter_step_is_exact_for_a_linear_source() {
        let (l, f0, g0) = (3.0, 2.0, 4.0);
        for h in [1e-5, 1e-3, 0.2, 5.0, 40.0] {
            let f1 = f0 - 1.5 * h;
            let st = Step::new(l, h);
            let (g1, sq) = st.advance(g0, f0, f1);
            let q = (f1 - f0) / (h * l);
            let p = (f0 - q) / l;
            let g = |t: f64| (g0 - p) * (-l * t).exp() + p + q * t;
            assert!((g1 - g(h)).abs() < 1e-12 * (1.0 + g(h).abs()), "h = {h}");
            let n = 20_000;
            let dt = h / f64::from(n);
            let simpson: f64 = (0..n)
                .map(|i| {
                    let a = dt * f64::from(i);
                    (g(a).powi(2) + 4.0 * g(a + 0.5 * dt).powi(2) + g(a + dt).powi(2)) * dt / 6.0
                })
                .sum();
            // the trapezoid branch (Λh < 1e-3) is good to (Λh)²/12 relative
            let tol = if st.x < Step::TRAPEZOID_BELOW {
                1e-6
            } else {
                1e-11
            };
            assert!(
                (sq / simpson - 1.0).abs() < tol,
                "h = {h}: {sq} vs {simpson}"
            );
        }
    }

    // τ → 0: the memory path (frequency domain, cosine transform of the orbit) meets the Ohmic one
    // (time-domain filter). The O(τω) change of the physics is 1e-7 here and each path's numerical
    // error ~1e-6 (module doc): 1e-5. Also for a reflected orbit, where the transform has a kink.
    #[test]
    fn memory_path_meets_the_ohmic_one_as_tau_vanishes() {
        let p = cubic(6.0);
        let kb = p.d2u(1.0).abs();
        let wall = Family::Cubic {
            eb: 6.0,
            l: 1.5,
            domain: (-0.2, 2.0),
        };
        for ratio in [0.1, 1.0, 3.0, 10.0, 100.0] {
            let g = ratio * kb.sqrt();
            for (pot, turn) in [(&p, -0.5), (&wall, -0.2)] {
                let lo = pot.domain().0;
                let a = energy_loss(pot, 1.0, g, None, 1.0, kb, turn, lo).unwrap();
                let b = energy_loss(pot, 1.0, g, Some(1e-8), 1.0, kb, turn, lo).unwrap();
                assert!(
                    (b.delta / a.delta - 1.0).abs() < 1e-5,
                    "{ratio}: {} vs {}",
                    b.delta,
                    a.delta
                );
            }
        }
    }

    // Memory with a wall cutting the orbit (cubic well, wall 0.5 from the barrier) against
    // reference/pgh.py, which sums the transform of the cut sech² orbit as a series and integrates
    // the plain complex form; (γ/ω_b, τω_b) = (30, 3) has a sharp resonance at √β. The trapezoid's
    // kink correction leaves O(h⁴) and the panels ~1e-8: 1e-5.
    #[test]
    fn memory_with_a_wall_matches_mpmath() {
        let v: serde_json::Value =
            serde_json::from_str(include_str!("../../reference/pgh_values.json")).unwrap();
        let p = Family::Cubic {
            eb: 6.0,
            l: 1.5,
            domain: (0.5, 2.0),
        };
        let kb = p.d2u(1.0).abs();
        for case in v["memory_reflected"].as_array().unwrap() {
            let f = |k: &str| case[k].as_f64().unwrap();
            let el = energy_loss(
                &p,
                1.0,
                f("gamma"),
                Some(f("memory_time")),
                1.0,
                kb,
                0.5,
                0.5,
            )
            .unwrap();
            assert!(el.reflected);
            let want = f("delta");
            assert!(
                (el.delta / want - 1.0).abs() < 1e-5,
                "{} vs {want}",
                el.delta
            );
        }
    }

    // A wall inside the orbit: the orbit is reflected and Δ is smaller than without the wall
    // (a shorter excursion) but positive.
    #[test]
    fn wall_reflects_the_orbit() {
        let p = Family::Cubic {
            eb: 6.0,
            l: 1.5,
            domain: (-0.2, 2.0),
        };
        let kb = p.d2u(1.0).abs();
        let el = energy_loss(&p, 1.0, 0.3, None, 1.0, kb, -0.2, -0.2).unwrap();
        assert!(el.reflected);
        let free = energy_loss(&cubic(6.0), 1.0, 0.3, None, 1.0, kb, -0.5, -2.0).unwrap();
        assert!(el.delta > 0.0 && el.delta < free.delta);
    }
}
