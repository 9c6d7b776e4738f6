//! The inner loop: several independent trajectories advanced in lock-step per thread (lanes), so
//! the dependent floating-point chain of one trajectory overlaps with the others'.
//!
//! Integrators (internal units, kT = 1):
//! - BAOAB (Leimkuhler & Matthews, Appl. Math. Res. Express 2013, 34): B: v += dt F/(2m);
//!   A: x += dt v/2; O: v = c1 v + sqrt((1 − c1²)/m) R, c1 = e^{−γ dt}; A; B. The O-step is exact, so
//!   the scheme is stable from γ → 0 to γ ≫ ω. One force evaluation per step.
//! - BAOAB with memory (generalised Langevin equation, exponential kernel K(t) = (γ/τ)e^{−t/τ},
//!   by Markovian embedding, PHYSICS.md §5): x' = v; m v' = −U'(x) + z;
//!   z' = −z/τ − (mγ/τ) v + (sqrt(2mγkT)/τ) η. The splitting is B A O A B as above, with O the exact
//!   propagation of the linear (v, z) block over dt: (v, z) ← E (v, z) + L (R₁, R₂), E = e^{A dt},
//!   A = [[0, 1/m], [−mγ/τ, −1/τ]], L Lᵀ = Σ = ∫₀^dt e^{As} Q e^{Aᵀs} ds = Σ_eq − E Σ_eq Eᵀ,
//!   Q = diag(0, 2mγkT/τ²), Σ_eq = diag(kT/m, mγkT/τ). Σ_eq solves the Lyapunov equation
//!   A Σ_eq + Σ_eq Aᵀ + Q = 0: the off-diagonal is (mγkT/τ)/m − (mγ/τ)(kT/m) = 0 and the zz entry
//!   −2(mγkT/τ)/τ + 2mγkT/τ² = 0, so the stationary law is
//!   exp(−[m v²/2 + U + τ z²/(2mγ)]/kT) and O keeps it exactly (fluctuation–dissipation by
//!   construction). E and Σ are computed once per run by scaling and squaring (Taylor series on a
//!   small step, then doubling Σ ← Σ + E Σ Eᵀ, E ← E²), which is exact to rounding for any τ: stiff
//!   (τ ≪ dt), over- or under-damped (complex eigenvalues), and free of the cancellation in
//!   Σ_eq − E Σ_eq Eᵀ when dt is small. As τ → 0 the O-step tends to BAOAB's.
//! - Overdamped Leimkuhler–Matthews: x' = x + dt D F + sqrt(2D dt)(R_n + R_{n+1})/2 (+ dt D' for
//!   D(x)); Euler–Maruyama: x' = x + dt (D F + D') + sqrt(2 D dt) R (Ermak & McCammon, J. Chem.
//!   Phys. 69, 1352 (1978) for the Itô drift D').
//!
//! Each integrator is one move function (up to the new force, `Kind::advance`) and a closing
//! half kick (`Kind::close`); the lanes and the one-trajectory `step` (FFS, reactive flux,
//! long runs, [`first_passage`]) both use them, and every trajectory starts from
//! [`State::fresh`], so a trajectory's outcome is the same bits whichever path runs it.
//!
//! Each trajectory owns one PCG stream seeded from (seed, index) only, and a trajectory never
//! interacts with its neighbours in the lane block, so every outcome depends on the seed and its
//! index alone: any thread count, chunking, shard or resume point gives the same numbers.
//! Walls at the domain ends reflect specularly (x → 2·wall − x, v → −v); the target absorbs at the
//! first step that reaches it.

use super::force::{Force, Mobility};
use crate::seed::stream;
use crate::stats::Outcome;
use rand::RngExt;
use rand_distr::StandardNormal;
use rand_pcg::Pcg64;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

/// Leimkuhler–Matthews with D(x): the Gaussian R_{n+1} enters step n with sqrt(2D(x_n)) and step
/// n+1 with sqrt(2D(x_{n+1})), and x_{n+1} already depends on it, so E[sqrt(2D(x_{n+1})) R_{n+1}]
/// adds g g' dt/4 = D'(x) dt/4 per step (g = sqrt(2D)). The Itô drift D' is therefore applied
/// with weight 3/4, so the effective drift is D F/kT + D' as the Fokker–Planck equation needs
/// (derived here; the scheme's published form assumes constant D). Euler–Maruyama uses D' as is.
pub const LM_ITO_DRIFT: f64 = 0.75;

/// Lanes per thread: 8 independent chains cover the ~10 ns latency of one step.
pub const LANES: usize = 8;
/// Steps per lock-step block (Gaussians are drawn a block at a time; the stop flag is polled once
/// per block).
pub(crate) const BLOCK: usize = 64;

/// How a lane's trajectory stands after a block that began at step `base` and first reached the
/// target at block step `first` (`u32::MAX`: not reached): escaped after `base + first + 1` steps
/// when that is within the horizon, censored at the horizon when the block reached it, else
/// still running (`None`). Integer logic shared by the lanes on a line and on a surface.
#[inline]
pub(crate) fn block_outcome(first: u32, base: u64, max_steps: u64) -> Option<(u64, bool)> {
    if first != u32::MAX && base + u64::from(first) < max_steps {
        Some((base + u64::from(first) + 1, true))
    } else if base + BLOCK as u64 >= max_steps {
        Some((max_steps, false))
    } else {
        None
    }
}

/// Which integrator.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// underdamped BAOAB
    Baoab,
    /// underdamped BAOAB with exponential memory friction (GLE by Markovian embedding)
    BaoabMemory,
    /// overdamped Leimkuhler–Matthews
    LeimkuhlerMatthews,
    /// overdamped Euler–Maruyama
    EulerMaruyama,
}

impl Kind {
    /// Whether the integrator carries a velocity.
    pub fn underdamped(self) -> bool {
        matches!(self, Self::Baoab | Self::BaoabMemory)
    }
}

/// Everything the loop needs, in internal units.
#[derive(Debug, Clone)]
pub struct Params {
    /// integrator
    pub kind: Kind,
    /// time step
    pub dt: f64,
    /// horizon in steps
    pub max_steps: u64,
    /// master seed
    pub seed: u64,
    /// absorbing point
    pub target: f64,
    /// +1 if the target is right of the start
    pub dir: f64,
    /// domain walls
    pub lo: f64,
    /// domain walls
    pub hi: f64,
    /// mass (underdamped)
    pub mass: f64,
    /// friction rate (underdamped); with memory, the kernel's strength ∫K = γ
    pub gamma: f64,
    /// memory time τ of the kernel K(t) = (γ/τ)e^{−t/τ} ([`Kind::BaoabMemory`] only; else unused)
    pub memory_time: f64,
    /// start position, or a sampler table (x, cdf) for thermal starts
    pub start: Start,
}

/// Start positions.
#[derive(Debug, Clone)]
pub enum Start {
    /// always here
    At(f64),
    /// inverse-CDF table of the Boltzmann distribution inside the reactant well
    Thermal(Vec<(f64, f64)>),
}

impl Start {
    /// One draw, as a trajectory's start does (exposed for tests).
    #[doc(hidden)]
    pub fn draw_for_test(&self, rng: &mut Pcg64) -> f64 {
        self.draw(rng)
    }

    fn draw(&self, rng: &mut Pcg64) -> f64 {
        match self {
            Self::At(x) => *x,
            Self::Thermal(t) => {
                let u: f64 = rng.random();
                let i = t.partition_point(|p| p.1 < u).clamp(1, t.len() - 1);
                let (a, b) = (t[i - 1], t[i]);
                let w = if b.1 > a.1 {
                    (u - a.1) / (b.1 - a.1)
                } else {
                    0.5
                };
                a.0 + w * (b.0 - a.0)
            }
        }
    }
}

/// Specular reflection at the walls, written as selects so the lane loop needs no branch.
#[inline(always)]
pub(crate) fn reflect(x: &mut f64, v: &mut f64, lo: f64, hi: f64) {
    let below = *x < lo;
    let above = *x > hi;
    let wall = if below { lo } else { hi };
    let out = below | above;
    *x = if out { 2.0 * wall - *x } else { *x };
    *v = if out { -*v } else { *v };
}

/// Step constants derived once per run.
pub(crate) struct Consts {
    hdt_m: f64,
    c1: f64,
    c2: f64,
    d0: f64,
    noise0: f64,
    /// memory: the exact O-step (v, z) ← E (v, z) + L (R₁, R₂), L lower triangular
    e: [[f64; 2]; 2],
    l11: f64,
    l21: f64,
    l22: f64,
}

type M2 = [[f64; 2]; 2];

fn mul(a: &M2, b: &M2) -> M2 {
    [
        [
            a[0][0] * b[0][0] + a[0][1] * b[1][0],
            a[0][0] * b[0][1] + a[0][1] * b[1][1],
        ],
        [
            a[1][0] * b[0][0] + a[1][1] * b[1][0],
            a[1][0] * b[0][1] + a[1][1] * b[1][1],
        ],
    ]
}

fn transpose(a: &M2) -> M2 {
    [[a[0][0], a[1][0]], [a[0][1], a[1][1]]]
}

fn add(a: &M2, b: &M2) -> M2 {
    [
        [a[0][0] + b[0][0], a[0][1] + b[0][1]],
        [a[1][0] + b[1][0], a[1][1] + b[1][1]],
    ]
}

fn scale(a: &M2, c: f64) -> M2 {
    [[c * a[0][0], c * a[0][1]], [c * a[1][0], c * a[1][1]]]
}

/// E = e^{A h} and Σ = ∫₀^h e^{As} Q e^{Aᵀs} ds for a 2×2 drift A and noise Q (Van Loan's pair),
/// by scaling and squaring: h is halved until ‖A h'‖ ≤ 1/4, both are summed as Taylor series
/// there (Σ(h') = Σₙ Tₙ h'^{n+1}/(n+1)!, T₀ = Q, Tₙ₊₁ = A Tₙ + Tₙ Aᵀ), then doubled back with
/// Σ(2h) = Σ(h) + E(h) Σ(h) E(h)ᵀ and E(2h) = E(h)². Every doubling adds a positive semidefinite
/// term, so Σ stays accurate even when it is tiny (small h) or saturates (h ≫ τ).
pub(crate) fn ou_step(a: &M2, q: &M2, h: f64) -> (M2, M2) {
    let norm = a
        .iter()
        .map(|r| r[0].abs() + r[1].abs())
        .fold(0.0f64, f64::max);
    let (mut hs, mut k) = (h, 0u32);
    while norm * hs > 0.25 && k < 2000 {
        hs *= 0.5;
        k += 1;
    }
    // the terms are carried already scaled, (A h')ⁿ/n! and Tₙ h'^{n+1}/(n+1)!, so nothing
    // overflows however large ‖A‖ is (memory times far below dt)
    let ah = scale(a, hs);
    let aht = transpose(&ah);
    let (mut e, mut sig) = ([[1.0, 0.0], [0.0, 1.0]], [[0.0; 2]; 2]);
    let (mut pa, mut t) = ([[1.0, 0.0], [0.0, 1.0]], scale(q, hs));
    // ‖A h'‖ ≤ 1/4 and 4^-24/24! is far below rounding
    for n in 1..=24 {
        pa = scale(&mul(&ah, &pa), 1.0 / f64::from(n));
        e = add(&e, &pa);
        sig = add(&sig, &t);
        t = scale(&add(&mul(&ah, &t), &mul(&t, &aht)), 1.0 / f64::from(n + 1));
    }
    for _ in 0..k {
        sig = add(&sig, &mul(&mul(&e, &sig), &transpose(&e)));
        e = mul(&e, &e);
    }
    (e, sig)
}

impl Consts {
    pub(crate) fn new<M: Mobility>(p: &Params, mob: &M) -> Self {
        let dt = p.dt;
        let d0 = mob.d(0.0).0;
        let (mut e, mut l11, mut l21, mut l22) = ([[0.0; 2]; 2], 0.0, 0.0, 0.0);
        if p.kind == Kind::BaoabMemory {
            let (m, g, tau) = (p.mass, p.gamma, p.memory_time);
            let a = [[0.0, 1.0 / m], [-m * g / tau, -1.0 / tau]];
            let q = [[0.0, 0.0], [0.0, 2.0 * m * g / (tau * tau)]];
            let (ee, sig) = ou_step(&a, &q, dt);
            e = ee;
            // Cholesky of Σ, guarded against rounding just below zero
            l11 = sig[0][0].max(0.0).sqrt();
            l21 = if l11 > 0.0 { sig[1][0] / l11 } else { 0.0 };
            l22 = (sig[1][1] - l21 * l21).max(0.0).sqrt();
        }
        Self {
            hdt_m: 0.5 * dt / p.mass,
            c1: (-p.gamma * dt).exp(),
            // sqrt(1 - c1^2) without cancellation for small gamma dt
            c2: (-(-2.0 * p.gamma * dt).exp_m1()).sqrt() / p.mass.sqrt(),
            d0,
            noise0: (2.0 * d0 * dt).sqrt(),
            e,
            l11,
            l21,
            l22,
        }
    }
}

/// The variables a step reads and writes, one lane's or one trajectory's: position, velocity,
/// memory force and the previous Gaussian (Leimkuhler–Matthews). Passed and returned by value, so
/// the lanes keep them in registers (and the compiler may vectorise across lanes).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Vars {
    x: f64,
    v: f64,
    z: f64,
    r: f64,
}

/// BAOAB up to the new force: B (half kick with the old force), A, O, A, reflection.
#[inline(always)]
fn baoab_move(p: &Params, c: &Consts, mut s: Vars, f: f64, g: f64) -> Vars {
    let dt = p.dt;
    let mut vv = s.v + c.hdt_m * f;
    s.x += 0.5 * dt * vv;
    vv = c.c1 * vv + c.c2 * g;
    s.x += 0.5 * dt * vv;
    reflect(&mut s.x, &mut vv, p.lo, p.hi);
    s.v = vv;
    s
}

/// BAOAB with memory up to the new force: as [`baoab_move`] with the exact O-step of the (v, z)
/// block, which takes two Gaussians.
#[inline(always)]
fn baoab_memory_move(p: &Params, c: &Consts, mut s: Vars, f: f64, g1: f64, g2: f64) -> Vars {
    let dt = p.dt;
    let mut vv = s.v + c.hdt_m * f;
    s.x += 0.5 * dt * vv;
    (vv, s.z) = o_memory(c, vv, s.z, g1, g2);
    s.x += 0.5 * dt * vv;
    reflect(&mut s.x, &mut vv, p.lo, p.hi);
    s.v = vv;
    s
}

/// The overdamped update x += dt (D F + w D') + sqrt(2 D dt) kick, then reflection; D' carries the
/// Itô weight `w` of the scheme ([`LM_ITO_DRIFT`] or 1).
#[inline(always)]
fn overdamped_move<M: Mobility>(
    p: &Params,
    c: &Consts,
    mob: &M,
    x: f64,
    f: f64,
    kick: f64,
    w: f64,
) -> f64 {
    let dt = p.dt;
    let (d, dd, noise) = if M::CONSTANT {
        (c.d0, 0.0, c.noise0)
    } else {
        let (d, dd) = mob.d(x);
        (d, dd * w, (2.0 * d * dt).sqrt())
    };
    let mut x = x + (dt * (d * f + dd) + noise * kick);
    let mut vv = 0.0;
    reflect(&mut x, &mut vv, p.lo, p.hi);
    x
}

/// Leimkuhler–Matthews: the kick is the mean of the previous and this step's Gaussian.
#[inline(always)]
fn leimkuhler_matthews_move<M: Mobility>(
    p: &Params,
    c: &Consts,
    mob: &M,
    mut s: Vars,
    f: f64,
    g: f64,
) -> Vars {
    let kick = 0.5 * (s.r + g);
    s.r = g;
    s.x = overdamped_move(p, c, mob, s.x, f, kick, LM_ITO_DRIFT);
    s
}

/// Euler–Maruyama: the kick is this step's Gaussian.
#[inline(always)]
fn euler_maruyama_move<M: Mobility>(
    p: &Params,
    c: &Consts,
    mob: &M,
    mut s: Vars,
    f: f64,
    g: f64,
) -> Vars {
    s.x = overdamped_move(p, c, mob, s.x, f, g, 1.0);
    s
}

impl Kind {
    /// Gaussians one step draws: the memory O-step needs two.
    #[inline(always)]
    pub fn gaussians(self) -> usize {
        if self == Self::BaoabMemory { 2 } else { 1 }
    }

    /// The integrator's move up to the new force, given the force `f` at the old position and the
    /// step's Gaussians (`g2` is read by the memory integrator only). Every path that steps a
    /// trajectory goes through here: the lanes (with `self` a constant, so the match folds away)
    /// and the single-trajectory runners.
    #[inline(always)]
    #[allow(clippy::too_many_arguments)] // one step's full context
    pub(crate) fn advance<M: Mobility>(
        self,
        p: &Params,
        c: &Consts,
        mob: &M,
        s: Vars,
        f: f64,
        g1: f64,
        g2: f64,
    ) -> Vars {
        match self {
            Self::Baoab => baoab_move(p, c, s, f, g1),
            Self::BaoabMemory => baoab_memory_move(p, c, s, f, g1, g2),
            Self::LeimkuhlerMatthews => leimkuhler_matthews_move(p, c, mob, s, f, g1),
            Self::EulerMaruyama => euler_maruyama_move(p, c, mob, s, f, g1),
        }
    }

    /// The end of a step once the force `f` at the new position is known: the closing half kick
    /// (underdamped).
    #[inline(always)]
    pub(crate) fn close(self, c: &Consts, v: f64, f: f64) -> f64 {
        if self.underdamped() {
            v + c.hdt_m * f
        } else {
            v
        }
    }
}

/// One integrator step of one trajectory, drawing its Gaussians from `rng`.
#[inline(always)]
fn step<F: Force, M: Mobility>(
    p: &Params,
    c: &Consts,
    force: &F,
    mob: &M,
    st: &mut State,
    rng: &mut Pcg64,
) {
    let g1: f64 = rng.sample(StandardNormal);
    let g2: f64 = if p.kind.gaussians() == 2 {
        rng.sample(StandardNormal)
    } else {
        0.0
    };
    let vars = Vars {
        x: st.x,
        v: st.v,
        z: st.z,
        r: st.r,
    };
    let n = p.kind.advance(p, c, mob, vars, st.f, g1, g2);
    st.f = force.force(n.x);
    (st.x, st.z, st.r) = (n.x, n.z, n.r);
    st.v = p.kind.close(c, n.v, st.f);
}

/// The exact O-step of the memory integrator on one (v, z) pair.
#[inline(always)]
fn o_memory(c: &Consts, v: f64, z: f64, r1: f64, r2: f64) -> (f64, f64) {
    (
        c.e[0][0] * v + c.e[0][1] * z + c.l11 * r1,
        c.e[1][0] * v + c.e[1][1] * z + c.l21 * r1 + c.l22 * r2,
    )
}
/// One trajectory of `steps` steps with no absorbing target (for stationary and diffusion checks),
/// returning (x, v) every `every` steps, starting from `x0` with a Maxwell velocity.
pub fn sample_path<F: Force, M: Mobility>(
    p: &Params,
    force: &F,
    mob: &M,
    index: u64,
    x0: f64,
    steps: u64,
    every: u64,
) -> Vec<(f64, f64)> {
    sample_states(p, force, mob, index, x0, steps, every)
        .into_iter()
        .map(|s| (s.x, s.v))
        .collect()
}

/// As [`sample_path`], returning the full state (with the memory force z) every `every` steps.
pub fn sample_states<F: Force, M: Mobility>(
    p: &Params,
    force: &F,
    mob: &M,
    index: u64,
    x0: f64,
    steps: u64,
    every: u64,
) -> Vec<State> {
    let c = Consts::new(p, mob);
    let mut rng = stream(p.seed, index);
    let mut st = State::fresh(p, force, x0, &mut rng);
    let mut out = Vec::with_capacity((steps / every.max(1)) as usize);
    for s in 1..=steps {
        step(p, &c, force, mob, &mut st, &mut rng);
        if s % every.max(1) == 0 {
            out.push(st);
        }
    }
    out
}

/// The first-passage trajectory `index` run alone, one `step` at a time: the outcome the lanes
/// give it (tests hold the two paths to the same bits).
pub fn first_passage<F: Force, M: Mobility>(p: &Params, force: &F, mob: &M, index: u64) -> Outcome {
    let c = Consts::new(p, mob);
    let (mut s, mut rng) = start_trajectory(p, force, index);
    for n in 1..=p.max_steps {
        step(p, &c, force, mob, &mut s, &mut rng);
        if p.dir * (s.x - p.target) >= 0.0 {
            return Outcome {
                index,
                steps: n,
                escaped: true,
            };
        }
    }
    Outcome {
        index,
        steps: p.max_steps,
        escaped: false,
    }
}

/// Runs the trajectories `indices`, calling `done` for each finished one. Stops early (dropping the
/// unfinished trajectories) when `stop` is set.
///
/// Workers share `next`, a cursor into `indices`: a lane that finishes takes the next index, so
/// lanes and threads stay busy until the last trajectories (which trajectory a lane runs never
/// changes its outcome).
pub fn run_chunk<F: Force, M: Mobility>(
    p: &Params,
    force: &F,
    mob: &M,
    indices: &[u64],
    next: &AtomicUsize,
    stop: &AtomicBool,
    done: &mut dyn FnMut(Outcome),
) {
    match p.kind {
        Kind::Baoab => lanes::<F, M, BAOAB>(p, force, mob, indices, next, stop, done),
        Kind::BaoabMemory => lanes::<F, M, GLE>(p, force, mob, indices, next, stop, done),
        Kind::LeimkuhlerMatthews => lanes::<F, M, LM>(p, force, mob, indices, next, stop, done),
        Kind::EulerMaruyama => lanes::<F, M, EM>(p, force, mob, indices, next, stop, done),
    }
}

pub(crate) const BAOAB: u8 = 0;
pub(crate) const LM: u8 = 1;
pub(crate) const EM: u8 = 2;
pub(crate) const GLE: u8 = 3;

/// The integrator of a lane loop's constant.
pub(crate) const fn kind_of(k: u8) -> Kind {
    match k {
        BAOAB => Kind::Baoab,
        LM => Kind::LeimkuhlerMatthews,
        EM => Kind::EulerMaruyama,
        _ => Kind::BaoabMemory,
    }
}

/// The lock-step loop for one integrator (a compile-time constant, so the step has no branch on
/// it). Each block first draws [`BLOCK`] Gaussians per lane (two per step with memory) from the
/// lane's own stream (independent streams interleave, hiding the generator's latency), then
/// advances all lanes [`BLOCK`] steps with the integrator's [`Kind::advance`] and
/// [`Kind::close`], noting each lane's first crossing. A lane that crossed mid-block keeps
/// integrating to the block end; those steps and their draws are discarded, so each trajectory
/// still sees exactly its own stream in order and its outcome is that of [`first_passage`].
fn lanes<F: Force, M: Mobility, const K: u8>(
    p: &Params,
    force: &F,
    mob: &M,
    indices: &[u64],
    next: &AtomicUsize,
    stop: &AtomicBool,
    done: &mut dyn FnMut(Outcome),
) {
    let kind = const { kind_of(K) };
    let c = Consts::new(p, mob);
    let mut x = [0.0f64; LANES];
    let mut v = [0.0f64; LANES];
    let mut f = [0.0f64; LANES];
    let mut r = [0.0f64; LANES];
    // the memory force (GLE only; stays zero otherwise)
    let mut zf = [0.0f64; LANES];
    let mut base = [0u64; LANES];
    let mut index = [0u64; LANES];
    let mut active = [false; LANES];
    let mut rng: [Pcg64; LANES] = std::array::from_fn(|_| stream(0, 0));
    let draws = kind.gaussians();
    let mut gauss = [[0.0f64; LANES]; 2 * BLOCK];
    let start = |k: usize,
                 x: &mut [f64; LANES],
                 v: &mut [f64; LANES],
                 f: &mut [f64; LANES],
                 r: &mut [f64; LANES],
                 zf: &mut [f64; LANES],
                 rng: &mut [Pcg64; LANES]|
     -> Option<u64> {
        let i = *indices.get(next.fetch_add(1, Ordering::Relaxed))?;
        let (s, g) = start_trajectory(p, force, i);
        (x[k], v[k], zf[k], f[k], r[k]) = (s.x, s.v, s.z, s.f, s.r);
        rng[k] = g;
        Some(i)
    };
    for k in 0..LANES {
        if let Some(i) = start(k, &mut x, &mut v, &mut f, &mut r, &mut zf, &mut rng) {
            index[k] = i;
            base[k] = 0;
            active[k] = true;
        }
    }
    let (target, dir) = (p.target, p.dir);
    while active.iter().any(|&a| a) {
        if stop.load(Ordering::Relaxed) {
            return;
        }
        for gs in gauss[..draws * BLOCK].iter_mut() {
            for (gk, g) in gs.iter_mut().zip(rng.iter_mut()) {
                *gk = g.sample(StandardNormal);
            }
        }
        let mut first = [u32::MAX; LANES];
        for s in 0..BLOCK {
            // Three passes over the lanes (move, force, close and check) put the lanes'
            // independent force evaluations next to each other, so their latencies overlap.
            let (g1s, g2s) = (&gauss[draws * s], &gauss[2 * s + 1]);
            for k in 0..LANES {
                let g2 = if draws == 2 { g2s[k] } else { 0.0 };
                let vars = Vars {
                    x: x[k],
                    v: v[k],
                    z: zf[k],
                    r: r[k],
                };
                let n = kind.advance(p, &c, mob, vars, f[k], g1s[k], g2);
                (x[k], v[k], zf[k], r[k]) = (n.x, n.v, n.z, n.r);
            }
            for k in 0..LANES {
                f[k] = force.force(x[k]);
            }
            for k in 0..LANES {
                v[k] = kind.close(&c, v[k], f[k]);
                let hit = dir * (x[k] - target) >= 0.0;
                first[k] = if hit & (first[k] == u32::MAX) {
                    s as u32
                } else {
                    first[k]
                };
            }
        }
        for k in 0..LANES {
            if !active[k] {
                continue;
            }
            match block_outcome(first[k], base[k], p.max_steps) {
                None => base[k] += BLOCK as u64,
                Some((steps, escaped)) => {
                    done(Outcome {
                        index: index[k],
                        steps,
                        escaped,
                    });
                    match start(k, &mut x, &mut v, &mut f, &mut r, &mut zf, &mut rng) {
                        Some(i) => {
                            index[k] = i;
                            base[k] = 0;
                        }
                        None => active[k] = false,
                    }
                }
            }
        }
    }
}

/// The full state of one trajectory between steps: position, velocity, the memory force, the force
/// at the position and the previous Gaussian (Leimkuhler–Matthews). Rare-event methods store and restart from it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct State {
    /// position
    pub x: f64,
    /// velocity (underdamped)
    pub v: f64,
    /// memory (auxiliary) force z of the GLE embedding ([`Kind::BaoabMemory`]; else 0)
    pub z: f64,
    /// force at x
    pub f: f64,
    /// previous Gaussian (overdamped Leimkuhler–Matthews)
    pub r: f64,
}

/// The start of first-passage trajectory `index`: its stream, a start position drawn from it and
/// a [`State::fresh`] there. The lanes and [`first_passage`] both start here.
#[inline]
pub fn start_trajectory<F: Force>(p: &Params, force: &F, index: u64) -> (State, Pcg64) {
    let mut rng = stream(p.seed, index);
    let x = p.start.draw(&mut rng);
    (State::fresh(p, force, x, &mut rng), rng)
}

impl State {
    /// A fresh state at `x`: a Maxwell velocity (underdamped), then as [`State::with_velocity`].
    /// Every trajectory, walker and long run starts from here, so all draw in the same order.
    pub fn fresh<F: Force>(p: &Params, force: &F, x: f64, rng: &mut Pcg64) -> Self {
        let v = if p.kind.underdamped() {
            rng.sample::<f64, _>(StandardNormal) / p.mass.sqrt()
        } else {
            0.0
        };
        Self::with_velocity(p, force, x, v, rng)
    }

    /// A state at `x` with velocity `v`, a memory force from its stationary law N(0, mγkT/τ)
    /// (memory) and a first Gaussian (Leimkuhler–Matthews), drawn in that order.
    pub fn with_velocity<F: Force>(p: &Params, force: &F, x: f64, v: f64, rng: &mut Pcg64) -> Self {
        let z = if p.kind == Kind::BaoabMemory {
            memory_force_sd(p) * rng.sample::<f64, _>(StandardNormal)
        } else {
            0.0
        };
        let r = if p.kind == Kind::LeimkuhlerMatthews {
            rng.sample(StandardNormal)
        } else {
            0.0
        };
        Self {
            x,
            v,
            z,
            f: force.force(x),
            r,
        }
    }
}

/// The stationary standard deviation of the memory force, sqrt(mγkT/τ) (kT = 1).
pub fn memory_force_sd(p: &Params) -> f64 {
    (p.mass * p.gamma / p.memory_time).sqrt()
}

/// One step of a stored state.
#[inline]
pub(crate) fn step_state<F: Force, M: Mobility>(
    p: &Params,
    c: &Consts,
    force: &F,
    mob: &M,
    s: &mut State,
    rng: &mut Pcg64,
) {
    step(p, c, force, mob, s, rng);
}

/// How `run_between` ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Exit {
    /// reached the upper interface
    Upper,
    /// fell back to the lower one
    Lower,
    /// hit the step limit
    Limit,
}

/// Probability that an overdamped path crossed a level between two steps whose end points both
/// lie `a` and `b` short of it: the Brownian-bridge result exp(−2ab/σ²) for a step whose noise has
/// variance σ² (e.g. Mannella, Int. J. Mod. Phys. C 13, 1177 (2002)). Checking crossings only at
/// the steps misses these and biases interface probabilities by O(sqrt(dt)); drawing against it
/// removes that bias. `s2` is σ²: 2D dt for Euler–Maruyama, D dt for Leimkuhler–Matthews, whose
/// per-step noise (R_n + R_{n+1})/2 has half the variance.
#[inline]
fn bridge_crossed(a: f64, b: f64, s2: f64, rng: &mut Pcg64) -> bool {
    // beyond e^-12 the draw is not worth its cost
    if 2.0 * a * b > 12.0 * s2 {
        return false;
    }
    rng.random::<f64>() < (-2.0 * a * b / s2).exp()
}

/// The per-step noise variance σ² the bridge needs.
#[inline]
fn step_variance<M: Mobility>(p: &Params, mob: &M, x: f64) -> f64 {
    let d = mob.d(x).0;
    if p.kind == Kind::LeimkuhlerMatthews {
        d * p.dt
    } else {
        2.0 * d * p.dt
    }
}

/// Advances `s` until the progress coordinate λ = dir·x reaches `upper` or falls to `lower`, or
/// `limit` steps pass. Returns how it ended and the steps taken. For overdamped dynamics a crossing
/// between two steps is detected with the Brownian-bridge probability.
#[allow(clippy::too_many_arguments)] // one trajectory's full context
pub(crate) fn run_between<F: Force, M: Mobility>(
    p: &Params,
    c: &Consts,
    force: &F,
    mob: &M,
    s: &mut State,
    rng: &mut Pcg64,
    lower: f64,
    upper: f64,
    limit: u64,
) -> (Exit, u64) {
    let overdamped = !p.kind.underdamped();
    let mut prev = p.dir * s.x;
    for n in 1..=limit {
        step(p, c, force, mob, s, rng);
        let lam = p.dir * s.x;
        if lam >= upper {
            return (Exit::Upper, n);
        }
        if lam <= lower {
            return (Exit::Lower, n);
        }
        if overdamped {
            let s2 = step_variance(p, mob, s.x);
            if bridge_crossed(upper - prev, upper - lam, s2, rng) {
                return (Exit::Upper, n);
            }
            if bridge_crossed(prev - lower, lam - lower, s2, rng) {
                return (Exit::Lower, n);
            }
        }
        prev = lam;
    }
    (Exit::Limit, limit)
}

/// A basin run for the flux through the first interface: from `x0`, counts crossings of
/// λ = `lambda0` made after the last visit to λ ≤ `lambda_a` (the reactant state), storing the
/// state at each, until `wanted` crossings or `limit` steps. A trajectory that reaches the target
/// is put back at `x0`. Returns the crossing states and the steps taken.
#[allow(clippy::too_many_arguments)] // one trajectory's full context
pub(crate) fn run_basin<F: Force, M: Mobility>(
    p: &Params,
    c: &Consts,
    force: &F,
    mob: &M,
    x0: f64,
    rng: &mut Pcg64,
    lambda_a: f64,
    lambda0: f64,
    wanted: usize,
    limit: u64,
) -> (Vec<State>, u64) {
    let mut s = State::fresh(p, force, x0, rng);
    let mut out = Vec::with_capacity(wanted);
    let mut armed = true;
    let target = p.dir * p.target;
    let overdamped = !p.kind.underdamped();
    let mut prev = p.dir * s.x;
    let mut n = 0;
    while n < limit && out.len() < wanted {
        step(p, c, force, mob, &mut s, rng);
        n += 1;
        let lam = p.dir * s.x;
        let s2 = if overdamped {
            step_variance(p, mob, s.x)
        } else {
            0.0
        };
        // crossings between steps count too (Brownian bridge, overdamped only)
        let crossed0 = lam >= lambda0
            || (overdamped && bridge_crossed(lambda0 - prev, lambda0 - lam, s2, rng));
        if armed && crossed0 {
            out.push(s);
            armed = false;
        } else if lam <= lambda_a
            || (overdamped && bridge_crossed(prev - lambda_a, lam - lambda_a, s2, rng))
        {
            armed = true;
        }
        if lam >= target {
            s = State::fresh(p, force, x0, rng);
            armed = true;
        }
        prev = p.dir * s.x;
    }
    (out, n)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn memory_consts(m: f64, g: f64, tau: f64, dt: f64) -> (M2, M2) {
        let a = [[0.0, 1.0 / m], [-m * g / tau, -1.0 / tau]];
        let q = [[0.0, 0.0], [0.0, 2.0 * m * g / (tau * tau)]];
        ou_step(&a, &q, dt)
    }

    // E = e^{A dt} against the closed form for a 2×2 matrix,
    // e^{M} = e^{s}[cosh(q) I + sinh(q)/q (M − s I)], s = tr M/2, q² = s² − det M (Cayley–Hamilton,
    // common practice, no source), for real (over-damped) and imaginary (under-damped) q; and
    // Σ against Σ_eq − E Σ_eq Eᵀ (PHYSICS.md §5), where the difference is well conditioned. Both
    // to 1e-12 relative: rounding in a few dozen 2×2 products.
    #[test]
    fn memory_o_step_matches_closed_forms() {
        for (m, g, tau, dt) in [
            (1.0, 3.0, 0.2, 0.05),
            (2.0, 0.5, 4.0, 0.3),
            (1.5, 8.0, 1.0, 0.1),
        ] {
            let (e, sig) = memory_consts(m, g, tau, dt);
            let mm = [[0.0, dt / m], [-m * g * dt / tau, -dt / tau]];
            let s = 0.5 * (mm[0][0] + mm[1][1]);
            let det = mm[0][0] * mm[1][1] - mm[0][1] * mm[1][0];
            let q2 = s * s - det;
            let (ch, sh) = if q2 >= 0.0 {
                let q = q2.sqrt();
                (q.cosh(), q.sinh() / q)
            } else {
                let q = (-q2).sqrt();
                (q.cos(), q.sin() / q)
            };
            for i in 0..2 {
                for j in 0..2 {
                    let id = if i == j { 1.0 } else { 0.0 };
                    let want = s.exp() * (ch * id + sh * (mm[i][j] - s * id));
                    assert!(
                        (e[i][j] - want).abs() < 1e-12 * want.abs().max(1.0),
                        "E {e:?}"
                    );
                }
            }
            let eq = [[1.0 / m, 0.0], [0.0, m * g / tau]];
            let want = add(&eq, &scale(&mul(&mul(&e, &eq), &transpose(&e)), -1.0));
            for i in 0..2 {
                for j in 0..2 {
                    let tol = 1e-12 * (eq[0][0] * eq[1][1]).sqrt().max(eq[i][i]);
                    assert!((sig[i][j] - want[i][j]).abs() < tol, "{sig:?} vs {want:?}");
                }
            }
        }
    }

    // τ → 0 (τ = 1e-7 dt, very stiff): the (v, z) block tends to the memoryless Ornstein–Uhlenbeck
    // step, v ← e^{−γ dt} v + sqrt((1 − e^{−2γ dt})/m) R, and z to its stationary law; the
    // corrections are O(τ/dt) = 1e-7, the tolerance 1e-6. A long step (dt = 1e4 τ, slow memory
    // relaxed) gives E → 0 and Σ → Σ_eq.
    #[test]
    fn memory_o_step_limits() {
        let (m, g, dt) = (1.3, 2.0, 0.01);
        let (e, sig) = memory_consts(m, g, 1e-7 * dt, dt);
        assert!((e[0][0] / (-g * dt).exp() - 1.0).abs() < 1e-6, "{e:?}");
        let var = -(-2.0 * g * dt).exp_m1() / m;
        assert!((sig[0][0] / var - 1.0).abs() < 1e-6, "{sig:?}");
        // at the smallest memory the plan keeps (2e-9 dt; crate::simulate::MEMORY_NEGLIGIBLE),
        // ‖A‖ dt ~ 5e8: the scaled Taylor terms must stay finite and give the same limit
        let (e, sig) = memory_consts(m, g, 2e-9 * dt, dt);
        assert!(e.iter().chain(sig.iter()).flatten().all(|x| x.is_finite()));
        assert!((e[0][0] / (-g * dt).exp() - 1.0).abs() < 1e-6, "{e:?}");
        assert!((sig[0][0] / var - 1.0).abs() < 1e-6, "{sig:?}");
        let (e, sig) = memory_consts(1.0, 1.0, 1.0, 1e4);
        assert!(e.iter().flatten().all(|x| x.abs() < 1e-12), "{e:?}");
        assert!((sig[0][0] - 1.0).abs() < 1e-12 && (sig[1][1] - 1.0).abs() < 1e-12);
        assert!(sig[0][1].abs() < 1e-12);
    }
}
