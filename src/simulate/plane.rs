//! Langevin ensembles on a surface U(x, y): first passage from a start point to a product
//! region, with the integrators, lanes, streams and outcomes of the line ([`super::engine`]), so
//! [`crate::stats::summarise`] gives the rate and MFPT with their intervals as in 1-D.
//!
//! Integrators (internal units, kT = 1, F = −∇U):
//! - BAOAB (Leimkuhler & Matthews, Appl. Math. Res. Express 2013, 34) with a diagonal mass
//!   (m_x, m_y) and a scalar friction rate γ, per coordinate k: B: v_k += dt F_k/(2m_k); A:
//!   x_k += dt v_k/2; O: v_k = c1 v_k + sqrt((1 − c1²)/m_k) R_k, c1 = e^{−γ dt} (exact); A; B.
//!   The overdamped limit has D = diag(1/(m_x γ), 1/(m_y γ)).
//! - Overdamped with a constant tensor D (symmetric positive definite):
//!   Euler–Maruyama x' = x + dt D F + sqrt(2 dt) L R (Ermak & McCammon, J. Chem. Phys. 69,
//!   1352 (1978): noise covariance 2 D dt; no divergence term for constant D), L Lᵀ = D by
//!   Cholesky; Leimkuhler–Matthews with the kick L (R_n + R_{n+1})/2 (Leimkuhler, Matthews &
//!   Stoltz, IMA J. Numer. Anal. 36, 13 (2016); a constant linear map of the noise keeps the
//!   scheme).
//!
//! Walls: the box reflects specularly per coordinate (x_k → 2·wall − x_k, v_k → −v_k), as on the
//! line. A step that ends on a forbidden point ([`PlaneForce::force`] gives `None`) is rejected:
//! the particle stays where it was, its velocity is reversed (underdamped; after the O-step) and
//! the old force is kept. Both rules keep e^{−U − m v²/2} unchanged where it is defined (the
//! Maxwell law is even in v), so the wall is reflecting; the rejection is accurate to O(sqrt(dt))
//! only in a boundary layer at the forbidden set, which matters only where e^{−U} is not
//! negligible there.
//!
//! Forces: [`SurfaceGrid`] tabulates U as a bicubic Hermite interpolant (values, gradient and the
//! mixed derivative U_xy at the nodes, all exact from the [`Surface`]; e.g. Press et al.,
//! Numerical Recipes, 3rd ed., §3.6) and returns minus its gradient: a conservative force, so the
//! simulated system samples e^{−Ũ} of the interpolant Ũ, with an O(h³) force error. The grid is
//! refined until the force error, measured against the exact gradient at four points of every
//! cell (where the derivative of the Hermite error peaks), is below [`FORCE_TOL_2D`] of the largest |∇U| on the allowed
//! nodes (the achieved bound is reported). A cell with a forbidden (or non-finite) corner is
//! forbidden as a whole, so the simulated forbidden set contains the surface's, widened by up to
//! one cell. [`ExactForce`] evaluates a closed form (e.g. Müller–Brown) directly.
//!
//! Streams: trajectory `index` draws from `seed::stream(seed, index)`: the Maxwell velocity
//! (x then y, underdamped), the first Gaussian pair (Leimkuhler–Matthews), then two Gaussians
//! (x, y) per step. The lanes ([`run_chunk`]) and the one-trajectory [`first_passage`] share
//! the move functions and give the same bits, for any thread count or chunking.

use super::engine::{BAOAB, BLOCK, EM, Kind, LANES, LM, block_outcome, kind_of, reflect};
use crate::potential::surface::{DiffusionTensor, Point, Rect, Surface};
use crate::seed::stream;
use crate::stats::Outcome;
use crate::theory::fv2d;
use rand::RngExt;
use rand_distr::StandardNormal;
use rand_pcg::Pcg64;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use thiserror::Error;

/// Relative force-interpolation tolerance on a surface (of the largest |∇U| on the allowed
/// nodes): the O(h³) bicubic force needs far more nodes than the line's Hermite table for the
/// same error, and 1e-6 is still far below the integrators' O(dt) error at any usable step.
pub const FORCE_TOL_2D: f64 = 1e-6;
/// Largest table: 2^20 cells (128 MiB); beyond this the error is reported as it is.
pub const MAX_CELLS_LOG2: u32 = 20;

/// Problems of a run on a surface.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum PlaneError {
    /// the memory integrator has no surface version
    #[error("the memory-friction integrator is not available on a surface")]
    Memory,
    /// a parameter that must be positive and finite
    #[error("{what} must be positive and finite, got {value}")]
    Positive {
        /// which parameter
        what: &'static str,
        /// its value
        value: f64,
    },
    /// the diffusion tensor is not SPD
    #[error("the diffusion tensor is not symmetric positive definite")]
    Diffusion,
    /// the start point is outside the box or forbidden
    #[error("the start point ({x}, {y}) is outside the box or on a forbidden point")]
    Start {
        /// x
        x: f64,
        /// y
        y: f64,
    },
    /// the start point is already in the product
    #[error("the start point ({x}, {y}) lies in the product region")]
    StartInProduct {
        /// x
        x: f64,
        /// y
        y: f64,
    },
}

/// The force −∇U (kT per length) as the inner loop sees it.
pub trait PlaneForce: Sync + Send {
    /// −∇U at `p`, or `None` where the point is forbidden (a wall).
    fn force(&self, p: Point) -> Option<[f64; 2]>;
}

/// −∇U of a surface evaluated directly (closed forms such as Müller–Brown).
#[derive(Debug, Clone)]
pub struct ExactForce<S>(pub S);

impl<S: Surface> PlaneForce for ExactForce<S> {
    #[inline(always)]
    fn force(&self, p: Point) -> Option<[f64; 2]> {
        if !self.0.allowed(p) {
            return None;
        }
        let g = self.0.grad(p);
        Some([-g[0], -g[1]])
    }
}

/// One cell's bicubic: U(u, v) = Σ a[4i + j] uⁱ vʲ on the local coordinates (u, v) ∈ [0, 1)²;
/// a[0] is NaN in a forbidden cell. Aligned to a cache line (two lines per cell).
#[derive(Debug, Clone, Copy)]
#[repr(align(64))]
struct Cell([f64; 16]);

/// A bicubic Hermite table of U on the surface's box; the force is minus its gradient.
#[derive(Debug, Clone)]
pub struct SurfaceGrid {
    x0: f64,
    y0: f64,
    inv_hx: f64,
    inv_hy: f64,
    last_i: i64,
    last_j: i64,
    nx: usize,
    cells: Vec<Cell>,
    /// cells along (x, y)
    pub shape: (usize, usize),
    /// the largest force error found, relative to `grad_scale`
    pub rel_error: f64,
    /// the largest |∇U| on the allowed nodes
    pub grad_scale: f64,
}

/// 1/2 − 1/(2√3): where the derivative of a cubic Hermite interpolant errs most.
const A: f64 = 0.211_324_865_405_187_1;

/// The cubic Hermite basis in power form: row n gives the coefficient of uⁿ from
/// (p0, h p0', p1, h p1') (as the line's `force::Grid`).
const HERMITE: [[f64; 4]; 4] = [
    [1.0, 0.0, 0.0, 0.0],
    [0.0, 1.0, 0.0, 0.0],
    [-3.0, -2.0, 3.0, -1.0],
    [2.0, 1.0, -2.0, 1.0],
];

impl SurfaceGrid {
    /// Tabulates `s` on its box, doubling the cells each way (from 64 along the longer side,
    /// cells about square) until the force error is below `tol` × max |∇U| or the table would
    /// pass 2^[`MAX_CELLS_LOG2`] cells.
    pub fn build(s: &dyn Surface, tol: f64) -> Self {
        let b = s.domain();
        let (lx, ly) = (b.x.1 - b.x.0, b.y.1 - b.y.0);
        let mut long = 64usize;
        loop {
            let other = |l: f64, m: f64| ((long as f64 * l / m).round() as usize).max(2);
            let (nx, ny) = if lx >= ly {
                (long, other(ly, lx))
            } else {
                (other(lx, ly), long)
            };
            let g = Self::at(s, b, nx, ny);
            let (err, scale) = g.error(s);
            let rel = err / scale;
            if rel <= tol || 4 * nx * ny > 1 << MAX_CELLS_LOG2 {
                return Self {
                    rel_error: rel,
                    grad_scale: scale,
                    ..g
                };
            }
            long *= 2;
        }
    }

    fn at(s: &dyn Surface, b: Rect, nx: usize, ny: usize) -> Self {
        let (hx, hy) = ((b.x.1 - b.x.0) / nx as f64, (b.y.1 - b.y.0) / ny as f64);
        let coord = |lo: f64, hi: f64, h: f64, i: usize, n: usize| {
            if i == n { hi } else { lo + i as f64 * h }
        };
        // per node (U, hx U_x, hy U_y, hx hy U_xy), NaN where forbidden
        let node = |i: usize, j: usize| {
            let p = [
                coord(b.x.0, b.x.1, hx, i, nx),
                coord(b.y.0, b.y.1, hy, j, ny),
            ];
            let u = s.u(p);
            if !s.allowed(p) || !u.is_finite() {
                return [f64::NAN; 4];
            }
            let g = s.grad(p);
            let h = s.hessian(p);
            [u, hx * g[0], hy * g[1], hx * hy * h[0][1]]
        };
        let nodes: Vec<[f64; 4]> = (0..=ny)
            .flat_map(|j| (0..=nx).map(move |i| (i, j)))
            .map(|(i, j)| node(i, j))
            .collect();
        let at = |i: usize, j: usize| nodes[j * (nx + 1) + i];
        let mut cells = Vec::with_capacity(nx * ny);
        for j in 0..ny {
            for i in 0..nx {
                let (n00, n10, n01, n11) = (at(i, j), at(i + 1, j), at(i, j + 1), at(i + 1, j + 1));
                // G[k][l]: k runs over (p0, p0_u, p1, p1_u) in u, l likewise in v
                let g = [
                    [n00[0], n00[2], n01[0], n01[2]],
                    [n00[1], n00[3], n01[1], n01[3]],
                    [n10[0], n10[2], n11[0], n11[2]],
                    [n10[1], n10[3], n11[1], n11[3]],
                ];
                let mut a = [0.0; 16];
                for (r, row) in HERMITE.iter().enumerate() {
                    for (c, col) in HERMITE.iter().enumerate() {
                        let mut sum = 0.0;
                        for k in 0..4 {
                            for l in 0..4 {
                                sum += row[k] * g[k][l] * col[l];
                            }
                        }
                        a[4 * r + c] = sum;
                    }
                }
                if [n00, n10, n01, n11].iter().any(|n| n[0].is_nan()) {
                    a[0] = f64::NAN;
                }
                cells.push(Cell(a));
            }
        }
        Self {
            x0: b.x.0,
            y0: b.y.0,
            inv_hx: 1.0 / hx,
            inv_hy: 1.0 / hy,
            last_i: nx as i64 - 1,
            last_j: ny as i64 - 1,
            nx,
            cells,
            shape: (nx, ny),
            rel_error: f64::NAN,
            grad_scale: f64::NAN,
        }
    }

    /// The largest |F̃ − F| at four points of every allowed cell, and the largest |∇U| on the
    /// allowed nodes. The derivative of the cubic Hermite error u²(1 − u)² peaks at
    /// u = 1/2 ± 1/(2√3) (and vanishes at the midpoint), while the value error peaks at 1/2, so
    /// ∂_x is checked at (A, 1/2), ∂_y at (1/2, A), both at (A, A) and (1 − A, 1 − A).
    fn error(&self, s: &dyn Surface) -> (f64, f64) {
        let (hx, hy) = (1.0 / self.inv_hx, 1.0 / self.inv_hy);
        let (mut err, mut gmax): (f64, f64) = (0.0, 1e-300);
        for (c, cell) in self.cells.iter().enumerate() {
            if cell.0[0].is_nan() {
                continue;
            }
            let (i, j) = ((c % self.nx) as f64, (c / self.nx) as f64);
            let corner = [self.x0 + i * hx, self.y0 + j * hy];
            let g = s.grad(corner);
            gmax = gmax.max(g[0].hypot(g[1]));
            for (du, dv) in [(A, 0.5), (0.5, A), (A, A), (1.0 - A, 1.0 - A)] {
                let p = [corner[0] + du * hx, corner[1] + dv * hy];
                if !s.allowed(p) {
                    continue;
                }
                let (Some(f), g) = (self.force(p), s.grad(p)) else {
                    continue;
                };
                err = err.max((f[0] + g[0]).hypot(f[1] + g[1]));
            }
        }
        (err, gmax)
    }

    /// The interpolated U at `p` (NaN in a forbidden cell).
    pub fn u(&self, p: Point) -> f64 {
        let (a, u, v) = self.locate(p);
        (0..4).rev().fold(0.0, |acc, i| {
            let q = a[4 * i] + v * (a[4 * i + 1] + v * (a[4 * i + 2] + v * a[4 * i + 3]));
            acc * u + q
        })
    }

    #[inline(always)]
    fn locate(&self, p: Point) -> (&[f64; 16], f64, f64) {
        let t = (p[0] - self.x0) * self.inv_hx;
        let s = (p[1] - self.y0) * self.inv_hy;
        // i64 conversions are single instructions; clamp keeps the index in range
        let i = (t as i64).clamp(0, self.last_i);
        let j = (s as i64).clamp(0, self.last_j);
        let a = &self.cells[j as usize * self.nx + i as usize].0;
        (a, t - i as f64, s - j as f64)
    }
}

impl PlaneForce for SurfaceGrid {
    #[inline(always)]
    fn force(&self, p: Point) -> Option<[f64; 2]> {
        let (a, u, v) = self.locate(p);
        if a[0].is_nan() {
            return None;
        }
        // q_i(v) = Σ_j a_ij vʲ and its v-derivative, for each power uⁱ
        let q = |i: usize| a[4 * i] + v * (a[4 * i + 1] + v * (a[4 * i + 2] + v * a[4 * i + 3]));
        let dq = |i: usize| a[4 * i + 1] + v * (2.0 * a[4 * i + 2] + 3.0 * v * a[4 * i + 3]);
        let ux = q(1) + u * (2.0 * q(2) + 3.0 * u * q(3));
        let uy = dq(0) + u * (dq(1) + u * (dq(2) + u * dq(3)));
        Some([-ux * self.inv_hx, -uy * self.inv_hy])
    }
}

/// The product region: a trajectory is absorbed at the first step that ends inside.
#[derive(Debug, Clone, PartialEq)]
pub enum Region {
    /// |p − centre| ≤ radius (e.g. around the product minimum)
    Disk {
        /// centre
        centre: Point,
        /// radius
        radius: f64,
    },
    /// n·p ≥ offset
    HalfPlane {
        /// the normal n (pointing into the region)
        normal: [f64; 2],
        /// the offset
        offset: f64,
    },
    /// the cells of a grid marked inside (e.g. where a committor is ≥ 0.99)
    Cells {
        /// the grid
        grid: fv2d::Grid,
        /// per cell
        inside: Vec<bool>,
    },
}

impl Region {
    /// Whether `p` lies in the region.
    #[inline(always)]
    pub fn contains(&self, p: Point) -> bool {
        match self {
            Self::Disk { centre, radius } => {
                let (dx, dy) = (p[0] - centre[0], p[1] - centre[1]);
                dx * dx + dy * dy <= radius * radius
            }
            Self::HalfPlane { normal, offset } => normal[0] * p[0] + normal[1] * p[1] >= *offset,
            Self::Cells { grid, inside } => {
                let within = |t: f64, r: (f64, f64)| r.0 <= t && t <= r.1;
                within(p[0], grid.x) && within(p[1], grid.y) && inside[grid.cell_of(p)]
            }
        }
    }

    /// The cells where the committor is at least `level` (cells where it is undefined are out).
    pub fn committor_at_least(c: &fv2d::Committor, level: f64) -> Self {
        Self::Cells {
            grid: c.grid,
            inside: c.q.iter().map(|&q| q >= level).collect(),
        }
    }
}

/// Everything the loop needs, in internal units.
#[derive(Debug, Clone)]
pub struct PlaneParams {
    /// integrator (not [`Kind::BaoabMemory`])
    pub kind: Kind,
    /// time step
    pub dt: f64,
    /// horizon in steps
    pub max_steps: u64,
    /// master seed
    pub seed: u64,
    /// start point
    pub start: Point,
    /// absorbing region
    pub product: Region,
    /// the box with reflecting walls
    pub domain: Rect,
    /// constant diffusion tensor (overdamped)
    pub diffusion: DiffusionTensor,
    /// masses (m_x, m_y) (underdamped)
    pub mass: [f64; 2],
    /// friction rate γ (underdamped)
    pub gamma: f64,
}

impl PlaneParams {
    /// Checks the parameters and the start point against `force`.
    ///
    /// # Errors
    /// The memory integrator, a non-positive step, mass or friction, a tensor that is not SPD,
    /// a start outside the box, forbidden or inside the product.
    pub fn check<F: PlaneForce>(&self, force: &F) -> Result<(), PlaneError> {
        let positive = |what: &'static str, value: f64| {
            if value > 0.0 && value.is_finite() {
                Ok(())
            } else {
                Err(PlaneError::Positive { what, value })
            }
        };
        positive("dt", self.dt)?;
        match self.kind {
            Kind::BaoabMemory => return Err(PlaneError::Memory),
            Kind::Baoab => {
                positive("mass (x)", self.mass[0])?;
                positive("mass (y)", self.mass[1])?;
                positive("friction rate", self.gamma)?;
            }
            Kind::LeimkuhlerMatthews | Kind::EulerMaruyama => {
                let d = self.diffusion;
                if !d.is_positive_definite() || d.0.iter().flatten().any(|x| !x.is_finite()) {
                    return Err(PlaneError::Diffusion);
                }
            }
        }
        let [x, y] = self.start;
        if !self.domain.contains(self.start) || force.force(self.start).is_none() {
            return Err(PlaneError::Start { x, y });
        }
        if self.product.contains(self.start) {
            return Err(PlaneError::StartInProduct { x, y });
        }
        Ok(())
    }
}

/// Step constants derived once per run.
struct Consts {
    /// dt D
    dtd: [[f64; 2]; 2],
    /// sqrt(2 dt) L, L the Cholesky factor of D: (l11, l21, l22)
    l: [f64; 3],
    /// dt/(2 m_k)
    hdt_m: [f64; 2],
    c1: f64,
    /// sqrt((1 − c1²)/m_k)
    c2: [f64; 2],
}

impl Consts {
    fn new(p: &PlaneParams) -> Self {
        let (dt, d) = (p.dt, p.diffusion.0);
        let l11 = d[0][0].sqrt();
        let l21 = d[1][0] / l11;
        let l22 = (d[1][1] - l21 * l21).max(0.0).sqrt();
        let s = (2.0 * dt).sqrt();
        // sqrt(1 − c1²) without cancellation for small γ dt
        let o = (-(-2.0 * p.gamma * dt).exp_m1()).sqrt();
        Self {
            dtd: [[dt * d[0][0], dt * d[0][1]], [dt * d[1][0], dt * d[1][1]]],
            l: [s * l11, s * l21, s * l22],
            hdt_m: [0.5 * dt / p.mass[0], 0.5 * dt / p.mass[1]],
            c1: (-p.gamma * dt).exp(),
            c2: [o / p.mass[0].sqrt(), o / p.mass[1].sqrt()],
        }
    }
}

/// The variables a step reads and writes: position, velocity and the previous Gaussian pair
/// (Leimkuhler–Matthews), by value so the lanes keep them in registers.
#[derive(Debug, Clone, Copy)]
struct Vars {
    x: [f64; 2],
    v: [f64; 2],
    r: [f64; 2],
}

/// The walls of the box, per coordinate.
#[inline(always)]
fn reflect_box(b: &Rect, x: &mut [f64; 2], v: &mut [f64; 2]) {
    reflect(&mut x[0], &mut v[0], b.x.0, b.x.1);
    reflect(&mut x[1], &mut v[1], b.y.0, b.y.1);
}

/// BAOAB up to the new force, per coordinate, then the box walls.
#[inline(always)]
fn baoab_move(p: &PlaneParams, c: &Consts, mut s: Vars, f: [f64; 2], g: [f64; 2]) -> Vars {
    let hdt = 0.5 * p.dt;
    for k in 0..2 {
        let mut v = s.v[k] + c.hdt_m[k] * f[k];
        s.x[k] += hdt * v;
        v = c.c1 * v + c.c2[k] * g[k];
        s.x[k] += hdt * v;
        s.v[k] = v;
    }
    reflect_box(&p.domain, &mut s.x, &mut s.v);
    s
}

/// The overdamped update x += dt D F + sqrt(2 dt) L kick, then the box walls.
#[inline(always)]
fn overdamped_move(p: &PlaneParams, c: &Consts, x: [f64; 2], f: [f64; 2], k: [f64; 2]) -> [f64; 2] {
    let d = &c.dtd;
    let mut y = [
        x[0] + (d[0][0] * f[0] + d[0][1] * f[1] + c.l[0] * k[0]),
        x[1] + (d[1][0] * f[0] + d[1][1] * f[1] + (c.l[1] * k[0] + c.l[2] * k[1])),
    ];
    let mut v = [0.0; 2];
    reflect_box(&p.domain, &mut y, &mut v);
    y
}

impl Kind {
    /// The move on a surface up to the new force, given the force `f` at the old position and
    /// the step's Gaussian pair `g`: the one step of the lanes and of the single trajectory.
    #[inline(always)]
    fn advance_plane(
        self,
        p: &PlaneParams,
        c: &Consts,
        mut s: Vars,
        f: [f64; 2],
        g: [f64; 2],
    ) -> Vars {
        match self {
            Self::Baoab | Self::BaoabMemory => baoab_move(p, c, s, f, g),
            Self::LeimkuhlerMatthews => {
                let kick = [0.5 * (s.r[0] + g[0]), 0.5 * (s.r[1] + g[1])];
                s.r = g;
                s.x = overdamped_move(p, c, s.x, f, kick);
                s
            }
            Self::EulerMaruyama => {
                s.x = overdamped_move(p, c, s.x, f, g);
                s
            }
        }
    }

    /// The end of a step once the new force `f` is known: the closing half kick (underdamped).
    #[inline(always)]
    fn close_plane(self, c: &Consts, mut v: [f64; 2], f: [f64; 2]) -> [f64; 2] {
        if self.underdamped() {
            v[0] += c.hdt_m[0] * f[0];
            v[1] += c.hdt_m[1] * f[1];
        }
        v
    }
}

/// The force at the moved point `n`, or, when that point is forbidden, the step rejected: back
/// to `old` with the velocity reversed and the old force `f_old` kept (module doc).
#[inline(always)]
fn land<F: PlaneForce>(force: &F, old: [f64; 2], mut n: Vars, f_old: [f64; 2]) -> (Vars, [f64; 2]) {
    match force.force(n.x) {
        Some(f) => (n, f),
        None => {
            n.x = old;
            n.v = [-n.v[0], -n.v[1]];
            (n, f_old)
        }
    }
}

/// The full state of one trajectory between steps.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlaneState {
    /// position
    pub x: [f64; 2],
    /// velocity (underdamped)
    pub v: [f64; 2],
    /// force at x
    pub f: [f64; 2],
    /// previous Gaussian pair (Leimkuhler–Matthews)
    pub r: [f64; 2],
}

impl PlaneState {
    /// A fresh state at `x`: a Maxwell velocity (underdamped, x then y), then the first Gaussian
    /// pair (Leimkuhler–Matthews). A forbidden `x` gets a zero force ([`PlaneParams::check`]
    /// refuses such a start).
    pub fn fresh<F: PlaneForce>(p: &PlaneParams, force: &F, x: Point, rng: &mut Pcg64) -> Self {
        let mut pair = || -> [f64; 2] { [rng.sample(StandardNormal), rng.sample(StandardNormal)] };
        let v = if p.kind.underdamped() {
            let g = pair();
            [g[0] / p.mass[0].sqrt(), g[1] / p.mass[1].sqrt()]
        } else {
            [0.0; 2]
        };
        let r = if p.kind == Kind::LeimkuhlerMatthews {
            pair()
        } else {
            [0.0; 2]
        };
        Self {
            x,
            v,
            f: force.force(x).unwrap_or([0.0; 2]),
            r,
        }
    }
}

/// The start of trajectory `index`: its stream and a fresh state at the start point.
pub fn start_trajectory<F: PlaneForce>(
    p: &PlaneParams,
    force: &F,
    index: u64,
) -> (PlaneState, Pcg64) {
    let mut rng = stream(p.seed, index);
    (PlaneState::fresh(p, force, p.start, &mut rng), rng)
}

/// One step of one trajectory, drawing its Gaussian pair from `rng`.
#[inline(always)]
fn step<F: PlaneForce>(
    p: &PlaneParams,
    c: &Consts,
    force: &F,
    st: &mut PlaneState,
    rng: &mut Pcg64,
) {
    let g = [rng.sample(StandardNormal), rng.sample(StandardNormal)];
    let vars = Vars {
        x: st.x,
        v: st.v,
        r: st.r,
    };
    let n = p.kind.advance_plane(p, c, vars, st.f, g);
    let (n, f) = land(force, st.x, n, st.f);
    (st.x, st.r, st.f) = (n.x, n.r, f);
    st.v = p.kind.close_plane(c, n.v, f);
}

/// Trajectory `index` from the start point for `steps` steps with no absorption, showing each
/// state (after step 1, 2, …) to `visit` (walls, stationary checks).
pub fn walk<F: PlaneForce>(
    p: &PlaneParams,
    force: &F,
    index: u64,
    steps: u64,
    mut visit: impl FnMut(u64, &PlaneState),
) {
    let c = Consts::new(p);
    let (mut s, mut rng) = start_trajectory(p, force, index);
    for n in 1..=steps {
        step(p, &c, force, &mut s, &mut rng);
        visit(n, &s);
    }
}

/// The first-passage trajectory `index` run alone, one step at a time: the outcome the lanes
/// give it (tests hold the two paths to the same bits).
pub fn first_passage<F: PlaneForce>(p: &PlaneParams, force: &F, index: u64) -> Outcome {
    let c = Consts::new(p);
    let (mut s, mut rng) = start_trajectory(p, force, index);
    for n in 1..=p.max_steps {
        step(p, &c, force, &mut s, &mut rng);
        if p.product.contains(s.x) {
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

/// Runs the trajectories `indices` (workers share `next`, a cursor into them), calling `done`
/// for each finished one; stops early when `stop` is set.
pub fn run_chunk<F: PlaneForce>(
    p: &PlaneParams,
    force: &F,
    indices: &[u64],
    next: &AtomicUsize,
    stop: &AtomicBool,
    done: &mut dyn FnMut(Outcome),
) {
    match p.kind {
        Kind::Baoab | Kind::BaoabMemory => {
            lanes::<F, BAOAB>(p, force, indices, next, stop, done);
        }
        Kind::LeimkuhlerMatthews => lanes::<F, LM>(p, force, indices, next, stop, done),
        Kind::EulerMaruyama => lanes::<F, EM>(p, force, indices, next, stop, done),
    }
}

/// Runs the trajectories `indices` on `threads` threads through the ensemble machinery of the
/// line ([`super::execute_with`]); `on_done` sees each finished one on this thread (return
/// `false` to end early). Returns the outcomes in index order.
pub fn execute<F: PlaneForce>(
    p: &PlaneParams,
    force: &F,
    indices: &[u64],
    threads: usize,
    stop: &AtomicBool,
    on_done: impl FnMut(&Outcome) -> bool,
) -> Vec<Outcome> {
    super::execute_with(
        indices,
        threads,
        stop,
        on_done,
        |idx, cursor, halt, send| {
            run_chunk(p, force, idx, cursor, halt, send);
        },
    )
}

/// The lock-step loop for one integrator (a compile-time constant), as the line's: each block
/// draws [`BLOCK`] Gaussian pairs per lane from the lane's own stream, then advances every lane
/// [`BLOCK`] steps in three passes (move, force, close and check), noting each lane's first step
/// in the product. Steps after it are discarded, so each trajectory's outcome is that of
/// [`first_passage`].
fn lanes<F: PlaneForce, const K: u8>(
    p: &PlaneParams,
    force: &F,
    indices: &[u64],
    next: &AtomicUsize,
    stop: &AtomicBool,
    done: &mut dyn FnMut(Outcome),
) {
    let kind = const { kind_of(K) };
    let c = Consts::new(p);
    let blank = Vars {
        x: [0.0; 2],
        v: [0.0; 2],
        r: [0.0; 2],
    };
    let mut s = [blank; LANES];
    let mut f = [[0.0f64; 2]; LANES];
    let mut base = [0u64; LANES];
    let mut index = [0u64; LANES];
    let mut active = [false; LANES];
    let mut rng: [Pcg64; LANES] = std::array::from_fn(|_| stream(0, 0));
    let mut gauss = [[0.0f64; LANES]; 2 * BLOCK];
    let start = |k: usize,
                 s: &mut [Vars; LANES],
                 f: &mut [[f64; 2]; LANES],
                 rng: &mut [Pcg64; LANES]|
     -> Option<u64> {
        let i = *indices.get(next.fetch_add(1, Ordering::Relaxed))?;
        let (st, g) = start_trajectory(p, force, i);
        s[k] = Vars {
            x: st.x,
            v: st.v,
            r: st.r,
        };
        f[k] = st.f;
        rng[k] = g;
        Some(i)
    };
    for k in 0..LANES {
        if let Some(i) = start(k, &mut s, &mut f, &mut rng) {
            (index[k], base[k], active[k]) = (i, 0, true);
        }
    }
    while active.iter().any(|&a| a) {
        if stop.load(Ordering::Relaxed) {
            return;
        }
        for gs in &mut gauss {
            for (gk, g) in gs.iter_mut().zip(rng.iter_mut()) {
                *gk = g.sample(StandardNormal);
            }
        }
        let mut first = [u32::MAX; LANES];
        for b in 0..BLOCK {
            let (gx, gy) = (&gauss[2 * b], &gauss[2 * b + 1]);
            let old: [[f64; 2]; LANES] = std::array::from_fn(|k| s[k].x);
            for k in 0..LANES {
                s[k] = kind.advance_plane(p, &c, s[k], f[k], [gx[k], gy[k]]);
            }
            for k in 0..LANES {
                (s[k], f[k]) = land(force, old[k], s[k], f[k]);
            }
            for k in 0..LANES {
                s[k].v = kind.close_plane(&c, s[k].v, f[k]);
                let hit = p.product.contains(s[k].x);
                first[k] = if hit & (first[k] == u32::MAX) {
                    b as u32
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
                    match start(k, &mut s, &mut f, &mut rng) {
                        Some(i) => (index[k], base[k]) = (i, 0),
                        None => active[k] = false,
                    }
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::potential::surface::{MullerBrown, Sym2};

    /// A smooth polynomial-times-exponential surface with a forbidden disk.
    #[derive(Debug)]
    struct Bumpy;

    impl Surface for Bumpy {
        fn u(&self, p: Point) -> f64 {
            let [x, y] = p;
            (x * x - 1.0).powi(2) + 0.5 * y * y + 0.3 * x * y + (-(x * x + y * y)).exp()
        }
        fn grad(&self, p: Point) -> [f64; 2] {
            let [x, y] = p;
            let e = (-(x * x + y * y)).exp();
            [
                4.0 * x * (x * x - 1.0) + 0.3 * y - 2.0 * x * e,
                y + 0.3 * x - 2.0 * y * e,
            ]
        }
        fn hessian(&self, p: Point) -> Sym2 {
            let [x, y] = p;
            let e = (-(x * x + y * y)).exp();
            let xy = 0.3 + 4.0 * x * y * e;
            [
                [12.0 * x * x - 4.0 + (4.0 * x * x - 2.0) * e, xy],
                [xy, 1.0 + (4.0 * y * y - 2.0) * e],
            ]
        }
        fn domain(&self) -> Rect {
            Rect {
                x: (-2.0, 2.0),
                y: (-1.5, 1.5),
            }
        }
        fn allowed(&self, p: Point) -> bool {
            self.domain().contains(p) && (p[0] - 1.0).hypot(p[1] - 1.0) > 0.3
        }
    }

    /// The table meets its own tolerance at points other than the checked ones (a 97 × 89
    /// lattice of arbitrary offsets; bicubic force error O(h³), so off the checked points it may
    /// be a small factor larger: 4× allowed), reproduces U at the nodes' neighbourhood to the
    /// same order, and forbids every cell touching the forbidden disk while allowing points far
    /// from it (common practice, no source).
    #[test]
    fn surface_grid_meets_its_tolerance() {
        let s = Bumpy;
        let g = SurfaceGrid::build(&s, 1e-6);
        assert!(g.rel_error <= 1e-6, "{}", g.rel_error);
        let mut gmax: f64 = 0.0;
        let mut err: f64 = 0.0;
        for i in 0..97 {
            for j in 0..89 {
                let p = [
                    -2.0 + 4.0 * (f64::from(i) + 0.31) / 97.0,
                    -1.5 + 3.0 * (f64::from(j) + 0.77) / 89.0,
                ];
                let e = s.grad(p);
                gmax = gmax.max(e[0].hypot(e[1]));
                match g.force(p) {
                    Some(f) => {
                        err = err.max((f[0] + e[0]).hypot(f[1] + e[1]));
                        assert!((g.u(p) - s.u(p)).abs() < 1e-5, "{p:?}");
                    }
                    None => assert!((p[0] - 1.0).hypot(p[1] - 1.0) < 0.3 + 0.1, "{p:?}"),
                }
                if !s.allowed(p) {
                    assert!(g.force(p).is_none(), "{p:?}");
                }
            }
        }
        assert!(err <= 4e-6 * gmax, "{err} of {gmax}");
    }

    /// Müller–Brown tabulated: the grid's force equals the closed form to its reported bound.
    #[test]
    fn muller_brown_table_against_closed_form() {
        let mb = MullerBrown::new(0.1);
        let g = SurfaceGrid::build(&mb, 1e-6);
        let exact = ExactForce(mb);
        let mut worst: f64 = 0.0;
        let mut gmax: f64 = 0.0;
        for p in [
            [-0.55, 1.44],
            [0.62, 0.03],
            [-0.05, 0.47],
            [0.2, 0.3],
            [-1.2, 1.9],
        ] {
            let (a, b) = (g.force(p).unwrap(), exact.force(p).unwrap());
            worst = worst.max((a[0] - b[0]).hypot(a[1] - b[1]));
            gmax = gmax.max(b[0].hypot(b[1]));
        }
        eprintln!("MB table {:?} rel {}", g.shape, g.rel_error);
        // the bound holds at the checked points; elsewhere a small factor more (4×, as above)
        assert!(worst <= 4.0 * g.rel_error * g.grad_scale, "{worst} {gmax}");
    }

    /// The regions' membership rules on a few points (exact geometry).
    #[test]
    fn regions() {
        let d = Region::Disk {
            centre: [1.0, 0.5],
            radius: 0.25,
        };
        assert!(d.contains([1.2, 0.5]) && !d.contains([1.3, 0.5]));
        let h = Region::HalfPlane {
            normal: [1.0, 1.0],
            offset: 1.0,
        };
        assert!(h.contains([0.5, 0.5]) && !h.contains([0.5, 0.4]));
        let grid = fv2d::Grid::new(
            Rect {
                x: (0.0, 2.0),
                y: (0.0, 1.0),
            },
            2,
            1,
        );
        let c = Region::Cells {
            grid,
            inside: vec![false, true],
        };
        assert!(c.contains([1.5, 0.5]) && !c.contains([0.5, 0.5]) && !c.contains([2.5, 0.5]));
    }
}
