//! Langevin ensembles on a surface (simulate::plane) against the exact overdamped references:
//! the 2-D finite-volume MFPT (theory::fv2d), the 1-D MFPT of a separable surface
//! (theory::mfpt and reference/surface2d_values.json, mpmath), and the overdamped limit of BAOAB
//! with the finite-friction factor of Langer's unstable root (theory::langer); plus determinism
//! across threads and chunkings, and the walls.
//!
//! Stochastic checks use fixed seeds and tolerances of 4 standard errors of the simulated MFPT
//! (the ensemble's own standard error) plus the stated time-step bias.

use escapade::potential::surface::{DiffusionTensor, Point, Rect, Surface, Sym2};
use escapade::potential::{Diffusion, Family};
use escapade::simulate::engine::Kind;
use escapade::simulate::plane::{
    ExactForce, FORCE_TOL_2D, PlaneError, PlaneForce, PlaneParams, Region, SurfaceGrid, execute,
    first_passage, run_chunk, walk,
};
use escapade::stats::{Outcome, Summary, summarise};
use escapade::theory::fv2d::{Grid, MfptStudy, mfpt_refined};
use escapade::theory::langer::{unstable_overdamped, unstable_underdamped};
use escapade::theory::mfpt;
use std::sync::atomic::{AtomicBool, AtomicUsize};

mod surfaces;
use surfaces::{ALPHA, Arc, BETA, Separable};

const REACTANT: Point = [-1.0, -BETA];
const PRODUCT: Point = [1.0, BETA];
const SADDLE: Point = [0.0, -ALPHA];

fn rotated(l0: f64, l1: f64, th: f64) -> Sym2 {
    let (s, c) = th.sin_cos();
    [
        [l0 * c * c + l1 * s * s, (l0 - l1) * c * s],
        [(l0 - l1) * c * s, l0 * s * s + l1 * c * c],
    ]
}

/// The FV MFPT from `start` to `product`, refined from h = 0.1 until it changes by < 2e-3.
fn fv_mfpt(s: &dyn Surface, d: &DiffusionTensor, start: Point, product: &Region) -> MfptStudy {
    let first = Grid::with_spacing(s.domain(), 0.1);
    mfpt_refined(
        s,
        d,
        start,
        &|p| product.contains(p),
        first,
        2e-3,
        4_000_000,
    )
    .unwrap()
}

#[allow(clippy::too_many_arguments)] // one run's full context
fn params(
    kind: Kind,
    dt: f64,
    max_steps: u64,
    seed: u64,
    start: Point,
    product: Region,
    domain: Rect,
    d: DiffusionTensor,
) -> PlaneParams {
    PlaneParams {
        kind,
        dt,
        max_steps,
        seed,
        start,
        product,
        domain,
        diffusion: d,
        mass: [1.0, 1.0],
        gamma: 1.0,
    }
}

/// n trajectories on two threads, summarised.
fn ensemble<F: PlaneForce>(p: &PlaneParams, f: &F, n: u64) -> Summary {
    p.check(f).unwrap();
    let indices: Vec<u64> = (0..n).collect();
    let out = execute(p, f, &indices, 2, &AtomicBool::new(false), |_| true);
    assert_eq!(out.len() as u64, n);
    summarise(&out, p.dt, p.max_steps)
}

/// The simulated MFPT against `want` within 4 standard errors plus `bias` (relative).
fn check(label: &str, s: &Summary, want: f64, bias: f64) {
    assert_eq!(
        s.censored, 0,
        "{label}: censored trajectories bias the MFPT"
    );
    let (t, se) = (s.mfpt.unwrap(), s.mfpt_se.unwrap());
    eprintln!(
        "{label}: simulated {t:.4} ± {se:.4} ({:.2}%), reference {want:.4}, off by {:.2} se ({:+.2}%)",
        100.0 * se / t,
        (t - want) / se,
        100.0 * (t / want - 1.0)
    );
    assert!(
        (t - want).abs() <= 4.0 * se + bias * want,
        "{label}: {t} ± {se} vs {want}"
    );
}

/// A separable surface, E (x² − 1)² + k y²/2 with E = k = 4 kT and D = 1, from the reactant
/// minimum (−1, 0) to the half-plane x ≥ 1: the simulated MFPT (tabulated force) equals the 1-D
/// MFPT of the double well (mpmath, reference/surface2d_values.json "mfpt_scalar" = 17.3159;
/// Gardiner Sec. 5.2) and the refined FV MFPT (theory::fv2d, 17.312, within 1e-3 of it:
/// tests/surface_theory.rs).
///
/// N = 4000 trajectories: σ ≈ 1.6% (the MFPT's coefficient of variation is ≈ 1). Time-step bias
/// measured on this problem: Leimkuhler–Matthews +2.5% at dt = 4e-3 (N = 20 000) and
/// +1.7 ± 0.5% at 2e-3 (seven seeds), as the line's engine on the 1-D double well gives
/// (+2.1 ± 0.7% at 2e-3, +0.0 ± 0.7% at 1e-3, N = 20 000); Euler–Maruyama −0.4 ± 0.7% at 1e-3
/// and −0.2 ± 0.7% at 5e-4. So dt = 1e-3 for both, with 1% allowed. The missed crossings
/// between steps shift the absorbing line by ≈ 0.58 sqrt(2 D dt) ≈ 0.02, which moves T by
/// T'(1)·0.02 ≈ 0.1% (T'(1) ≈ 0.7 here), inside that allowance.
#[test]
fn separable_surface_matches_one_dimensional_mfpt() {
    let s = Separable::new(4.0, 4.0);
    let d = DiffusionTensor::scalar(1.0);
    let product = Region::HalfPlane {
        normal: [1.0, 0.0],
        offset: 1.0,
    };
    let pot = Family::DoubleWell {
        eb: 4.0,
        a: 1.0,
        domain: (-2.0, 4.0),
    };
    let one = mfpt::mfpt(&pot, &Diffusion::Constant(1.0), -2.0, -1.0, 1.0, &[0.0]).time;
    // the crate's 1-D quadrature against the mpmath value (quadrature accuracy, 1e-9)
    assert!((one / 17.315_911_190_209_07 - 1.0).abs() < 1e-9, "{one}");
    let fv = mfpt_refined(
        &s,
        &d,
        [-1.0, 0.0],
        &|p| product.contains(p),
        Grid::with_spacing(s.domain(), 0.2),
        1e-3,
        2_000_000,
    )
    .unwrap();
    let grid = SurfaceGrid::build(&s, FORCE_TOL_2D);
    assert!(grid.rel_error <= FORCE_TOL_2D);
    for (kind, dt, bias, seed) in [
        (Kind::LeimkuhlerMatthews, 1e-3, 0.01, 11),
        (Kind::EulerMaruyama, 1e-3, 0.01, 12),
    ] {
        let p = params(
            kind,
            dt,
            (40.0 * one / dt) as u64,
            seed,
            [-1.0, 0.0],
            product.clone(),
            s.domain(),
            d,
        );
        let sum = ensemble(&p, &grid, 4000);
        check(&format!("separable {kind:?} vs 1-D"), &sum, one, bias);
        // the FV value is within 1e-3 of the 1-D one, well inside the allowance
        check(
            &format!("separable {kind:?} vs FV"),
            &sum,
            fv.time,
            bias + 1e-3,
        );
    }
}

/// The done-when case: the double well along an arc (non-separable, curved valley, E = 4 kT)
/// with a full anisotropic tensor D = R(0.6) diag(0.5, 1.5) R(0.6)ᵀ, from the reactant minimum
/// (−1, −0.5) to the disk of radius 0.3 around the product minimum (1, 0.5): Leimkuhler–Matthews
/// and Euler–Maruyama on the tabulated force against the refined FV MFPT (theory::fv2d,
/// refinement to a change < 2e-3: 36.72 on 183², Richardson 36.70, so the reference is good to
/// ≈ 0.1%).
///
/// N = 4000: σ ≈ 1.6%. Time-step bias measured with N = 10 000 (σ = 1.0%): LM +0.9% at
/// dt = 2e-3 and +0.2% at 1e-3; EM −0.2% at 1e-3 and −0.7% at 5e-4 (no trend beyond σ). So
/// dt = 1e-3 for both, with 1% allowed plus 0.2% for the reference.
#[test]
fn arc_surface_with_anisotropic_tensor_matches_fv_mfpt() {
    let s = Arc::new(4.0);
    let d = DiffusionTensor(rotated(0.5, 1.5, 0.6));
    assert!(
        d.0[0][1].abs() > 0.2,
        "the tensor must be far from diagonal"
    );
    let product = Region::Disk {
        centre: PRODUCT,
        radius: 0.3,
    };
    let fv = fv_mfpt(&s, &d, REACTANT, &product);
    let grid = SurfaceGrid::build(&s, FORCE_TOL_2D);
    eprintln!(
        "arc: FV {:?}; force table {:?} cells, error {:.1e}",
        fv, grid.shape, grid.rel_error
    );
    for (kind, dt, bias, seed) in [
        (Kind::LeimkuhlerMatthews, 1e-3, 0.012, 21),
        (Kind::EulerMaruyama, 1e-3, 0.012, 22),
    ] {
        let p = params(
            kind,
            dt,
            (40.0 * fv.time / dt) as u64,
            seed,
            REACTANT,
            product.clone(),
            s.domain(),
            d,
        );
        let sum = ensemble(&p, &grid, 4000);
        check(&format!("arc {kind:?} vs FV"), &sum, fv.time, bias);
    }
}

/// BAOAB at high friction tends to the overdamped MFPT with D = kT/(m γ) per coordinate: the
/// arc surface with masses (1, 0.5) and γ = 20 (closed-form force), against the FV MFPT with
/// D = diag(1/20, 2/20) multiplied by the finite-friction factor of the barrier crossing,
/// λ_overdamped/λ_underdamped = 1.036 (Langer's unstable roots at the saddle, theory::langer;
/// Langer, Ann. Phys. 54, 258 (1969)). The factor's next order is (ω_b/γ)⁴ ≈ 0.1%; the well
/// side changes the MFPT at order 1/γ² in the relaxation time only, far below σ.
///
/// N = 2000: σ ≈ 2.2%. Time-step bias measured with N = 4000 (σ = 1.5%): −1.5% at dt = 0.01
/// (γ dt = 0.2) and −0.4% at 0.005; 2% allowed at 0.01.
///
/// Moderate friction is not compared with Langer's rate: at a 4 kT barrier the rate formulas
/// themselves are off by O(kT/ΔU) ≈ 25%, so such a check would test the formula, not the
/// integrator.
#[test]
fn baoab_at_high_friction_tends_to_overdamped_fv_mfpt() {
    let s = Arc::new(4.0);
    let product = Region::Disk {
        centre: PRODUCT,
        radius: 0.3,
    };
    let (g, mass) = (20.0, [1.0, 0.5]);
    let d = DiffusionTensor::diagonal(1.0 / (mass[0] * g), 1.0 / (mass[1] * g));
    let fv = fv_mfpt(&s, &d, REACTANT, &product);
    let hb = s.hessian(SADDLE);
    let l_od = unstable_overdamped(&d, hb).unwrap().0.abs();
    let m = [[mass[0], 0.0], [0.0, mass[1]]];
    let l_ud = unstable_underdamped(m, [[g, 0.0], [0.0, g]], hb)
        .unwrap()
        .abs();
    let factor = l_od / l_ud;
    assert!(factor > 1.0 && factor < 1.05, "{factor}");
    let mut p = params(
        Kind::Baoab,
        0.01,
        (40.0 * fv.time * factor / 0.01) as u64,
        31,
        REACTANT,
        product,
        s.domain(),
        d,
    );
    p.mass = mass;
    p.gamma = g;
    let sum = ensemble(&p, &ExactForce(s), 2000);
    check("arc BAOAB γ = 20 vs FV", &sum, fv.time * factor, 0.02);
}

/// Same outcomes, bit for bit, whichever path runs a trajectory: the lanes with two workers
/// sharing the cursor, each trajectory alone ([`first_passage`]), 1 and 2 threads, and two
/// chunkings of the index range; per integrator, with a horizon that censors about half
/// (common practice for reproducible engines, no source).
#[test]
fn outcomes_do_not_depend_on_threads_or_chunking() {
    let s = Arc::new(2.0);
    let grid = SurfaceGrid::build(&s, FORCE_TOL_2D);
    let product = Region::Disk {
        centre: PRODUCT,
        radius: 0.3,
    };
    let d = DiffusionTensor(rotated(0.5, 1.5, 0.6));
    let n = 50u64;
    let indices: Vec<u64> = (0..n).collect();
    for (kind, dt) in [
        (Kind::LeimkuhlerMatthews, 2e-3),
        (Kind::EulerMaruyama, 2e-3),
        (Kind::Baoab, 0.01),
    ] {
        let mut p = params(
            kind,
            dt,
            1 << 40,
            5,
            REACTANT,
            product.clone(),
            s.domain(),
            d,
        );
        p.mass = [1.3, 0.7];
        p.gamma = 2.0;
        // the median escape step as the horizon: about half censored, in every block slot
        let mut steps: Vec<u64> = indices
            .iter()
            .map(|&i| first_passage(&p, &grid, i).steps)
            .collect();
        steps.sort_unstable();
        p.max_steps = steps[steps.len() / 2];
        let alone: Vec<Outcome> = indices
            .iter()
            .map(|&i| first_passage(&p, &grid, i))
            .collect();
        let stop = AtomicBool::new(false);
        let one = execute(&p, &grid, &indices, 1, &stop, |_| true);
        let two = execute(&p, &grid, &indices, 2, &stop, |_| true);
        let mut chunked = Vec::new();
        for part in [&indices[..17], &indices[17..]] {
            let cursor = AtomicUsize::new(0);
            run_chunk(&p, &grid, part, &cursor, &stop, &mut |o| chunked.push(o));
        }
        chunked.sort_unstable();
        let censored = alone.iter().filter(|o| !o.escaped).count();
        assert!(
            censored > 5 && censored < 45,
            "{kind:?}: {censored} censored"
        );
        assert_eq!(one, alone, "{kind:?}: lanes vs alone");
        assert_eq!(two, alone, "{kind:?}: 2 threads");
        assert_eq!(chunked, alone, "{kind:?}: two chunks");
    }
}

/// A steep slope U = 50 (x + y) on the unit box pushes into the corner (0, 0), where the particle
/// starts (on both walls); a step (dt = 0.002 overdamped, 0.01 underdamped) moves ≈ 0.1, so
/// steps near the corner cross a wall. For
/// 10⁶ steps per integrator every position stays inside the box (specular reflection per
/// coordinate; common practice, no source).
#[test]
fn walls_keep_the_particle_in_the_box() {
    let s = Slope;
    let product = Region::HalfPlane {
        normal: [1.0, 0.0],
        offset: 10.0,
    };
    let d = DiffusionTensor(rotated(0.5, 1.5, 0.6));
    for kind in [Kind::LeimkuhlerMatthews, Kind::EulerMaruyama, Kind::Baoab] {
        let dt = if kind.underdamped() { 0.01 } else { 0.002 };
        let p = params(kind, dt, 1, 3, [0.0, 0.0], product.clone(), s.domain(), d);
        let (mut outside, mut near) = (0u64, 0u64);
        walk(&p, &ExactForce(Slope), 0, 1_000_000, |_, st| {
            outside += u64::from(!s.domain().contains(st.x));
            near += u64::from(st.x[0] < 0.05 && st.x[1] < 0.05);
        });
        assert_eq!(outside, 0, "{kind:?}");
        // the push is felt: the particle spends most of its time near the corner
        assert!(near > 100_000, "{kind:?}: {near}");
    }
}

/// A forbidden disk (radius 0.2) at the bottom of a harmonic pit that pulls into it: the particle
/// starts on the disk's edge and, for 10⁶ steps per integrator, never ends a step on a forbidden
/// point, with the closed form and with the table (whose forbidden set covers the surface's):
/// rejected moves are walls (simulate::plane module doc; common practice, no source).
#[test]
fn forbidden_points_are_walls() {
    let s = Pit;
    let grid = SurfaceGrid::build(&s, FORCE_TOL_2D);
    let product = Region::HalfPlane {
        normal: [1.0, 0.0],
        offset: 10.0,
    };
    let d = DiffusionTensor(rotated(0.5, 1.5, 0.6));
    for kind in [Kind::LeimkuhlerMatthews, Kind::EulerMaruyama, Kind::Baoab] {
        let p = params(
            kind,
            0.005,
            1,
            4,
            [0.5, 0.73],
            product.clone(),
            s.domain(),
            d,
        );
        p.check(&grid).unwrap();
        let mut bad = 0u64;
        let mut rim = 0u64;
        let mut count = |st: &escapade::simulate::plane::PlaneState| {
            bad += u64::from(!s.allowed(st.x));
            rim += u64::from((st.x[0] - 0.5).hypot(st.x[1] - 0.5) < 0.3);
        };
        walk(&p, &ExactForce(Pit), 0, 1_000_000, |_, st| count(st));
        walk(&p, &grid, 1, 1_000_000, |_, st| count(st));
        assert_eq!(bad, 0, "{kind:?}");
        // the pull is felt: the particle spends much of its time at the rim
        assert!(rim > 200_000, "{kind:?}: {rim}");
    }
}

/// The set-up refuses what it cannot run: the memory integrator, a forbidden start, a start in
/// the product, a tensor that is not positive definite.
#[test]
fn bad_parameters_are_refused() {
    let product = Region::HalfPlane {
        normal: [1.0, 0.0],
        offset: 10.0,
    };
    let d = DiffusionTensor::scalar(1.0);
    let ok = params(
        Kind::EulerMaruyama,
        0.01,
        10,
        1,
        [0.9, 0.9],
        product,
        Pit.domain(),
        d,
    );
    ok.check(&ExactForce(Pit)).unwrap();
    let mut p = ok.clone();
    p.kind = Kind::BaoabMemory;
    assert_eq!(p.check(&ExactForce(Pit)), Err(PlaneError::Memory));
    let mut p = ok.clone();
    p.start = [0.5, 0.5];
    assert!(matches!(
        p.check(&ExactForce(Pit)),
        Err(PlaneError::Start { .. })
    ));
    let mut p = ok.clone();
    p.product = Region::Disk {
        centre: [0.9, 0.9],
        radius: 0.1,
    };
    assert!(matches!(
        p.check(&ExactForce(Pit)),
        Err(PlaneError::StartInProduct { .. })
    ));
    let mut p = ok;
    p.diffusion = DiffusionTensor([[1.0, 2.0], [2.0, 1.0]]);
    assert_eq!(p.check(&ExactForce(Pit)), Err(PlaneError::Diffusion));
}

/// U = 50 (x + y) on the unit box.
#[derive(Debug, Clone)]
struct Slope;

impl Surface for Slope {
    fn u(&self, p: Point) -> f64 {
        50.0 * (p[0] + p[1])
    }
    fn grad(&self, _p: Point) -> [f64; 2] {
        [50.0, 50.0]
    }
    fn hessian(&self, _p: Point) -> Sym2 {
        [[0.0; 2]; 2]
    }
    fn domain(&self) -> Rect {
        Rect {
            x: (0.0, 1.0),
            y: (0.0, 1.0),
        }
    }
}

/// U = 25 |p − c|², c = (0.5, 0.5), forbidden within 0.2 of c.
#[derive(Debug, Clone)]
struct Pit;

impl Surface for Pit {
    fn u(&self, p: Point) -> f64 {
        if self.allowed(p) {
            25.0 * ((p[0] - 0.5).powi(2) + (p[1] - 0.5).powi(2))
        } else {
            f64::INFINITY
        }
    }
    fn grad(&self, p: Point) -> [f64; 2] {
        [50.0 * (p[0] - 0.5), 50.0 * (p[1] - 0.5)]
    }
    fn hessian(&self, _p: Point) -> Sym2 {
        [[50.0, 0.0], [0.0, 50.0]]
    }
    fn domain(&self) -> Rect {
        Rect {
            x: (0.0, 1.0),
            y: (0.0, 1.0),
        }
    }
    fn allowed(&self, p: Point) -> bool {
        self.domain().contains(p) && (p[0] - 0.5).hypot(p[1] - 0.5) > 0.2
    }
}
