//! The exact overdamped reference on a surface of two coordinates: the mean first-passage time
//! to a product region, the committor between two regions and the transition-path-theory rate,
//! from a finite-volume discretisation of the backward equation
//!
//!   e^{U} ∇·(D e^{−U} ∇T) = −1   (MFPT, T = 0 on the product region),
//!   e^{U} ∇·(D e^{−U} ∇q) = 0    (committor, q = 0 on A, 1 on B),
//!
//! with reflecting walls at the box and at forbidden cells ([`Surface::allowed`] false, or U
//! more than [`U_CAP`] kT above the lowest cell), kT = 1.
//!
//! **Scheme.** Cell-centred grid. The Dirichlet form ∫ e^{−U} ∇T·D∇T is discretised as a sum
//! over bonds, each bond (i, j) along a lattice direction e with conductance ρ_e and weight
//! e^{−(U_i+U_j)/2}; the generator's rate i → j is ρ_e e^{−(U_j−U_i)/2}. Then
//! e^{−U_i} k_ij = e^{−U_j} k_ji, so e^{−U_i} is the discrete generator's exact stationary
//! distribution, and after the similarity transform T = e^{U/2} y the linear system has
//! off-diagonals −ρ_e and diagonals Σ ρ_e e^{(U_i−U_j)/2}: symmetric positive definite (the
//! square-root approximation: Bicout & Szabo, J. Chem. Phys. 109, 2325 (1998) in 1-D; Lie,
//! Fackeldey & Weber, SIAM J. Matrix Anal. Appl. 34, 738 (2013); from memory). The directions
//! and conductances come from Selling's decomposition of the tensor in grid units,
//! diag(1/h) D diag(1/h) = Σ_k ρ_k e_k e_kᵀ with ρ_k ≥ 0 and integer e_k (Selling, J. reine
//! angew. Math. 77, 143 (1874); Fehrenbach & Mirebeau, J. Math. Imaging Vis. 49, 123 (2014);
//! from memory). A diagonal D gives the standard 5-point scheme; a full tensor gives bonds along
//! a diagonal (or, for strong anisotropy, a longer lattice vector). Every rate is ≥ 0, so the
//! matrix is an M-matrix for every SPD tensor (the per-cell-gradient alternative has negative
//! weights on one diagonal whenever D_xy ≠ 0 and can give committors outside [0, 1]).
//!
//! **Order.** Second order in the interior for smooth U (centred differences; e^{−ΔU/2}
//! reproduces the drift to O(h²)). A region boundary or a forbidden cell is resolved to the cell
//! (O(h)) unless it lies on cell centres: a half-plane through the box's midpoint does, on the odd
//! grids that [`Grid::refined`] makes. With a full tensor the box walls add an O(h) error where
//! e^{−U} is not negligible (bonds leaving the box are dropped), and a bond longer than one cell
//! can pass over a one-cell-thick forbidden wall.
//!
//! **Transition-path theory** (E & Vanden-Eijnden, J. Stat. Phys. 123, 503 (2006); Metzner,
//! Schütte & Vanden-Eijnden, Multiscale Model. Simul. 7, 1192 (2009)): the reactive frequency
//! ν_AB = ∫ e^{−U} ∇q·D∇q / Z (the discrete Dirichlet form of q), the rate k_AB = ν_AB/π_A with
//! π_A = ∫ e^{−U}(1 − q)/Z the probability of having last visited A, and the reactive flux field
//! J = e^{−U} D∇q / Z (centred differences per cell).
//!
//! The sparse Cholesky factorisation (fill-reducing ordering) is `faer`'s, run sequentially, so
//! results never depend on the thread count.

use crate::potential::surface::{DiffusionTensor, Point, Rect, Surface, Sym2};
use faer::Side;
use faer::linalg::solvers::Solve;
use faer::sparse::{SparseColMat, Triplet};
use serde::Serialize;
use thiserror::Error;

/// Cells more than this (kT) above the lowest cell are treated as walls: their Boltzmann weight
/// e^{−600} is nothing, and the scaled system stays within the double range (e^{±300}).
pub const U_CAP: f64 = 600.0;

/// Problems of the 2-D finite-volume reference.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum Fv2dError {
    /// the grid is too coarse to mean anything
    #[error("the grid needs at least 3 x 3 cells, got {nx} x {ny}")]
    GridTooSmall {
        /// cells along x
        nx: usize,
        /// cells along y
        ny: usize,
    },
    /// the diffusion tensor is not SPD
    #[error("the diffusion tensor is not symmetric positive definite")]
    Diffusion,
    /// U is NaN or −∞ somewhere in the box
    #[error("U is not a number (or −∞) at ({x}, {y})")]
    NotFinite {
        /// x
        x: f64,
        /// y
        y: f64,
    },
    /// a region holds no allowed cell centre
    #[error("the {which} region contains no allowed cell centre on the {nx} x {ny} grid")]
    EmptyRegion {
        /// which region ("target", "A", "B")
        which: &'static str,
        /// cells along x
        nx: usize,
        /// cells along y
        ny: usize,
    },
    /// regions A and B share a cell
    #[error("regions A and B overlap")]
    Overlap,
    /// the start point is walled off or outside the box
    #[error("the start point ({x}, {y}) is outside the allowed cells or cannot reach the target")]
    Start {
        /// x
        x: f64,
        /// y
        y: f64,
    },
    /// the factorisation failed (cannot happen for an SPD matrix short of running out of memory)
    #[error("sparse Cholesky factorisation failed: {0}")]
    Solver(String),
    /// grid refinement stopped at the cell limit before the MFPT settled
    #[error(
        "the MFPT changed by {change:.1e} (relative) at the last refinement, above {tol:.0e}, and the next grid would exceed {max_cells} cells"
    )]
    NotConverged {
        /// last relative change
        change: f64,
        /// asked tolerance
        tol: f64,
        /// the cell limit
        max_cells: usize,
        /// every grid solved, the finest last (what the caller may accept at the cap)
        study: Box<MfptStudy>,
    },
    /// the MFPT solve lost all accuracy: a failed factorisation, a T that is not a positive
    /// number, or T changing by more than itself between two grids (at high barriers the
    /// symmetric system's condition number grows like e^{ΔU}/h²)
    #[error("the MFPT solve broke down on the {nx} x {ny} grid: {reason}")]
    Breakdown {
        /// what went wrong
        reason: String,
        /// cells along x of the grid where it happened
        nx: usize,
        /// cells along y
        ny: usize,
        /// the grids solved before (their values are not trusted either)
        steps: Vec<RefinementStep>,
    },
}

/// A relative change of T between two grids above this is no discretisation error but a solve
/// that lost its accuracy (the refinement starts at 1/30 of the box, where real changes are
/// a few per cent).
pub const BREAKDOWN_CHANGE: f64 = 1.0;

/// A cell-centred grid of nx × ny cells on a box.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Grid {
    /// x range of the box
    pub x: (f64, f64),
    /// y range of the box
    pub y: (f64, f64),
    /// cells along x
    pub nx: usize,
    /// cells along y
    pub ny: usize,
}

impl Grid {
    /// nx × ny cells on `domain`.
    pub fn new(domain: Rect, nx: usize, ny: usize) -> Self {
        Self {
            x: domain.x,
            y: domain.y,
            nx,
            ny,
        }
    }
    /// Odd cell counts with a spacing near `h` in both directions (odd, so the box's midlines
    /// pass through cell centres on this grid and on every [`Grid::refined`] one).
    pub fn with_spacing(domain: Rect, h: f64) -> Self {
        let odd = |len: f64| {
            let n = ((len / h).round() as usize).max(3);
            n | 1
        };
        Self::new(
            domain,
            odd(domain.x.1 - domain.x.0),
            odd(domain.y.1 - domain.y.0),
        )
    }
    /// The next grid of a refinement: 2n + 1 cells each way (the spacing about halves and odd
    /// counts stay odd).
    pub fn refined(&self) -> Self {
        Self {
            nx: 2 * self.nx + 1,
            ny: 2 * self.ny + 1,
            ..*self
        }
    }
    /// The cell sizes (hx, hy).
    pub fn spacing(&self) -> (f64, f64) {
        (
            (self.x.1 - self.x.0) / self.nx as f64,
            (self.y.1 - self.y.0) / self.ny as f64,
        )
    }
    /// Number of cells.
    pub fn cells(&self) -> usize {
        self.nx * self.ny
    }
    /// The index of cell (i, j): j nx + i.
    pub fn index(&self, i: usize, j: usize) -> usize {
        j * self.nx + i
    }
    /// The centre of cell (i, j).
    pub fn centre(&self, i: usize, j: usize) -> Point {
        let (hx, hy) = self.spacing();
        [
            self.x.0 + (i as f64 + 0.5) * hx,
            self.y.0 + (j as f64 + 0.5) * hy,
        ]
    }
    /// The centre of cell `c`.
    pub fn centre_of(&self, c: usize) -> Point {
        self.centre(c % self.nx, c / self.nx)
    }
    /// The cell containing `p` (clamped to the box).
    pub fn cell_of(&self, p: Point) -> usize {
        let (hx, hy) = self.spacing();
        let clamp = |t: f64, n: usize| (t.floor().max(0.0) as usize).min(n - 1);
        let i = clamp((p[0] - self.x.0) / hx, self.nx);
        let j = clamp((p[1] - self.y.0) / hy, self.ny);
        self.index(i, j)
    }
}

/// One lattice direction of the stencil: bonds (i, j) → (i + di, j + dj) with conductance ρ
/// (per time unit; the rate of a bond on a flat surface).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Bond {
    /// cell offset (di, dj)
    pub offset: [i64; 2],
    /// ρ = the Selling weight of the tensor in grid units
    pub conductance: f64,
}

/// Selling's decomposition of a symmetric positive definite 2x2 matrix: up to three integer
/// vectors e_k and weights ρ_k > 0 with m = Σ ρ_k e_k e_kᵀ. Starts from the superbase
/// (1, 0), (0, 1), (−1, −1) and, while two of its vectors have b_iᵀ m b_j > 0, replaces
/// (b_i, b_j, b_k) by (−b_i, b_j, b_i − b_j) (each step lowers Σ b_kᵀ m b_k, so it ends); then
/// ρ_k = −b_iᵀ m b_j and e_k ⊥ b_k for {i, j, k} distinct.
pub fn selling(m: Sym2) -> Vec<Bond> {
    let dot = |a: [i64; 2], b: [i64; 2]| {
        let (a0, a1, b0, b1) = (a[0] as f64, a[1] as f64, b[0] as f64, b[1] as f64);
        a0 * (m[0][0] * b0 + m[0][1] * b1) + a1 * (m[1][0] * b0 + m[1][1] * b1)
    };
    let mut b: [[i64; 2]; 3] = [[1, 0], [0, 1], [-1, -1]];
    const PAIRS: [(usize, usize, usize); 3] = [(0, 1, 2), (0, 2, 1), (1, 2, 0)];
    // the number of steps grows like the log of the anisotropy; 200 covers any double
    for _ in 0..200 {
        let Some(&(i, j, _)) = PAIRS.iter().find(|(i, j, _)| dot(b[*i], b[*j]) > 0.0) else {
            break;
        };
        let (bi, bj) = (b[i], b[j]);
        b = [[-bi[0], -bi[1]], bj, [bi[0] - bj[0], bi[1] - bj[1]]];
    }
    PAIRS
        .iter()
        .filter_map(|&(i, j, k)| {
            let rho = -dot(b[i], b[j]);
            (rho > 0.0).then_some(Bond {
                offset: [-b[k][1], b[k][0]],
                conductance: rho,
            })
        })
        .collect()
}

/// The discrete generator on a grid: U per cell (shifted by its minimum), which cells are
/// allowed, and the stencil.
#[derive(Debug, Clone)]
pub struct Generator {
    grid: Grid,
    /// U − U_min per cell; +∞ where forbidden
    u: Vec<f64>,
    u_min: f64,
    stencil: Vec<Bond>,
}

/// The MFPT on every cell.
#[derive(Debug, Clone, Serialize)]
pub struct MfptField {
    /// the grid
    pub grid: Grid,
    /// T per cell (0 in the target, +∞ where forbidden or walled off from the target)
    pub time: Vec<f64>,
}

/// The committor and what transition-path theory makes of it.
#[derive(Debug, Clone, Serialize)]
pub struct Committor {
    /// the grid
    pub grid: Grid,
    /// q per cell: 0 in A, 1 in B, NaN where forbidden or walled off from both
    pub q: Vec<f64>,
    /// ν_AB, the number of reactive A → B trajectories per unit time
    pub reactive_frequency: f64,
    /// π_A, the probability of having last visited A
    pub last_in_a: f64,
    /// k_AB = ν_AB / π_A
    pub rate: f64,
    /// J = e^{−U} D∇q / Z per cell (zero where q is undefined)
    pub flux: Vec<[f64; 2]>,
}

/// One grid of a refinement study.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RefinementStep {
    /// cells along x
    pub nx: usize,
    /// cells along y
    pub ny: usize,
    /// the MFPT from the start point
    pub time: f64,
}

/// An MFPT refined until it settles.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MfptStudy {
    /// every grid and its value, coarse to fine
    pub steps: Vec<RefinementStep>,
    /// the finest grid's value (not extrapolated)
    pub time: f64,
    /// |ΔT|/T at the last refinement
    pub last_change: f64,
    /// the order p of T_h = T + C h^p fitted to the last three grids, when they show one
    pub observed_order: Option<f64>,
    /// Richardson's extrapolation with the observed order (reported, not used)
    pub extrapolated: Option<f64>,
}

impl MfptField {
    /// T at `p`: bilinear between the four surrounding cell centres when all are finite, else
    /// the value of the cell containing `p`.
    pub fn at(&self, p: Point) -> f64 {
        interpolate(&self.grid, &self.time, p)
    }
}

impl Committor {
    /// q at `p` (bilinear, as [`MfptField::at`]).
    pub fn at(&self, p: Point) -> f64 {
        interpolate(&self.grid, &self.q, p)
    }
}

fn interpolate(g: &Grid, v: &[f64], p: Point) -> f64 {
    let (hx, hy) = g.spacing();
    let s = ((p[0] - g.x.0) / hx - 0.5).clamp(0.0, (g.nx - 1) as f64);
    let t = ((p[1] - g.y.0) / hy - 0.5).clamp(0.0, (g.ny - 1) as f64);
    let (i, j) = ((s as usize).min(g.nx - 2), (t as usize).min(g.ny - 2));
    let (fs, ft) = (s - i as f64, t - j as f64);
    let c = [
        v[g.index(i, j)],
        v[g.index(i + 1, j)],
        v[g.index(i, j + 1)],
        v[g.index(i + 1, j + 1)],
    ];
    if c.iter().all(|x| x.is_finite()) {
        (1.0 - ft) * ((1.0 - fs) * c[0] + fs * c[1]) + ft * ((1.0 - fs) * c[2] + fs * c[3])
    } else {
        v[g.cell_of(p)]
    }
}

/// Per-cell role in a linear solve.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Role {
    /// forbidden, or walled off from every fixed cell
    Off,
    /// fixed value (Dirichlet)
    Fixed(f64),
    /// unknown number k
    Unknown(usize),
}

impl Generator {
    /// The generator of overdamped diffusion with tensor `d` on `surface`, discretised on `grid`.
    ///
    /// # Errors
    /// A grid below 3 × 3, a tensor that is not SPD, or U NaN/−∞ at an allowed cell centre.
    pub fn new(surface: &dyn Surface, d: &DiffusionTensor, grid: Grid) -> Result<Self, Fv2dError> {
        if grid.nx < 3 || grid.ny < 3 {
            return Err(Fv2dError::GridTooSmall {
                nx: grid.nx,
                ny: grid.ny,
            });
        }
        if !d.is_positive_definite() {
            return Err(Fv2dError::Diffusion);
        }
        let mut u = Vec::with_capacity(grid.cells());
        for c in 0..grid.cells() {
            let p = grid.centre_of(c);
            let v = if surface.allowed(p) {
                surface.u(p)
            } else {
                f64::INFINITY
            };
            if v.is_nan() || v == f64::NEG_INFINITY {
                return Err(Fv2dError::NotFinite { x: p[0], y: p[1] });
            }
            u.push(v);
        }
        let u_min = u.iter().copied().fold(f64::INFINITY, f64::min);
        if u_min == f64::INFINITY {
            return Err(Fv2dError::EmptyRegion {
                which: "allowed",
                nx: grid.nx,
                ny: grid.ny,
            });
        }
        for v in &mut u {
            *v -= u_min;
            if *v > U_CAP {
                *v = f64::INFINITY;
            }
        }
        let (hx, hy) = grid.spacing();
        let m = d.0;
        let scaled = [
            [m[0][0] / (hx * hx), m[0][1] / (hx * hy)],
            [m[1][0] / (hx * hy), m[1][1] / (hy * hy)],
        ];
        Ok(Self {
            grid,
            u,
            u_min,
            stencil: selling(scaled),
        })
    }

    /// The grid.
    pub fn grid(&self) -> &Grid {
        &self.grid
    }
    /// The stencil (Selling's bonds).
    pub fn stencil(&self) -> &[Bond] {
        &self.stencil
    }
    /// U per cell in kT (+∞ where forbidden or above the cap).
    pub fn u(&self, c: usize) -> f64 {
        self.u[c] + self.u_min
    }
    /// Whether cell `c` takes part (allowed and below the cap).
    pub fn allowed(&self, c: usize) -> bool {
        self.u[c].is_finite()
    }

    /// Every bond (a, b, ρ) between two allowed cells, each once.
    fn bonds(&self) -> impl Iterator<Item = (usize, usize, f64)> + '_ {
        let g = self.grid;
        (0..g.cells())
            .filter(|&c| self.allowed(c))
            .flat_map(move |c| {
                let (i, j) = ((c % g.nx) as i64, (c / g.nx) as i64);
                self.stencil.iter().filter_map(move |b| {
                    let (ni, nj) = (i + b.offset[0], j + b.offset[1]);
                    if ni < 0 || nj < 0 || ni >= g.nx as i64 || nj >= g.ny as i64 {
                        return None;
                    }
                    let n = g.index(ni as usize, nj as usize);
                    self.allowed(n).then_some((c, n, b.conductance))
                })
            })
    }

    /// The rate from cell `a` to cell `b` (0 unless they share a bond); scans every bond, so it
    /// is meant for checks, not for loops.
    pub fn rate(&self, a: usize, b: usize) -> f64 {
        self.bonds()
            .filter(|&(x, y, _)| (x, y) == (a, b) || (x, y) == (b, a))
            .map(|(_, _, rho)| rho * (-0.5 * (self.u[b] - self.u[a])).exp())
            .sum()
    }

    /// (L f)_i = Σ_j k_ij (f_j − f_i) on allowed cells (0 elsewhere).
    pub fn apply(&self, f: &[f64]) -> Vec<f64> {
        let mut out = vec![0.0; self.grid.cells()];
        for (a, b, rho) in self.bonds() {
            let e = (-0.5 * (self.u[b] - self.u[a])).exp();
            out[a] += rho * e * (f[b] - f[a]);
            out[b] += rho / e * (f[a] - f[b]);
        }
        out
    }

    /// The Boltzmann distribution e^{−U_i} / Σ e^{−U} per cell (0 where forbidden).
    pub fn boltzmann(&self) -> Vec<f64> {
        let w: Vec<f64> = self.u.iter().map(|u| (-u).exp()).collect();
        let z: f64 = w.iter().sum();
        w.into_iter().map(|x| x / z).collect()
    }

    /// Marks the cells that can reach a fixed cell through bonds as unknowns (numbered), the
    /// rest of the free cells as off.
    fn number(&self, roles: &mut [Role]) -> usize {
        let g = self.grid;
        let mut reach = vec![false; g.cells()];
        let mut stack: Vec<usize> = (0..g.cells())
            .filter(|&c| matches!(roles[c], Role::Fixed(_)))
            .collect();
        for &c in &stack {
            reach[c] = true;
        }
        // bonds are symmetric: neighbours of c are c ± offset
        while let Some(c) = stack.pop() {
            let (i, j) = ((c % g.nx) as i64, (c / g.nx) as i64);
            for b in &self.stencil {
                for s in [1, -1] {
                    let (ni, nj) = (i + s * b.offset[0], j + s * b.offset[1]);
                    if ni < 0 || nj < 0 || ni >= g.nx as i64 || nj >= g.ny as i64 {
                        continue;
                    }
                    let n = g.index(ni as usize, nj as usize);
                    if !reach[n] && self.allowed(n) {
                        reach[n] = true;
                        stack.push(n);
                    }
                }
            }
        }
        let mut k = 0;
        for (c, r) in roles.iter_mut().enumerate() {
            if *r == Role::Off && reach[c] {
                *r = Role::Unknown(k);
                k += 1;
            }
        }
        k
    }

    /// Solves Σ_j k_ij (f_j − f_i) = −source on the unknown cells, f fixed elsewhere, in the
    /// symmetric form f = e^{U/2} y, with one step of iterative refinement.
    fn solve(&self, roles: &[Role], n: usize, source: f64) -> Result<Vec<f64>, Fv2dError> {
        let mut diag = vec![0.0; n];
        let mut rhs = vec![0.0; n];
        let mut off: Vec<(usize, usize, f64)> = Vec::new();
        for (c, r) in roles.iter().enumerate() {
            if let Role::Unknown(k) = *r {
                rhs[k] = source * (-0.5 * self.u[c]).exp();
            }
        }
        for (a, b, rho) in self.bonds() {
            for (x, y) in [(a, b), (b, a)] {
                if let Role::Unknown(k) = roles[x] {
                    diag[k] += rho * (0.5 * (self.u[x] - self.u[y])).exp();
                    if let Role::Fixed(v) = roles[y]
                        && v != 0.0
                    {
                        rhs[k] += rho * (-0.5 * self.u[y]).exp() * v;
                    }
                }
            }
            if let (Role::Unknown(ka), Role::Unknown(kb)) = (roles[a], roles[b]) {
                off.push((ka.max(kb), ka.min(kb), -rho));
            }
        }
        let mut triplets: Vec<Triplet<usize, usize, f64>> = diag
            .iter()
            .enumerate()
            .map(|(k, &v)| Triplet::new(k, k, v))
            .collect();
        triplets.extend(off.iter().map(|&(r, c, v)| Triplet::new(r, c, v)));
        let m = SparseColMat::<usize, f64>::try_new_from_triplets(n, n, &triplets)
            .map_err(|e| Fv2dError::Solver(format!("{e:?}")))?;
        let llt = m
            .sp_cholesky(Side::Lower)
            .map_err(|e| Fv2dError::Solver(format!("{e:?}")))?;
        let mut y = faer::Col::<f64>::from_fn(n, |k| rhs[k]);
        llt.solve_in_place(y.as_mat_mut());
        // one step of iterative refinement: the matrix is ill-conditioned by e^{ΔU}
        let mut r = faer::Col::<f64>::from_fn(n, |k| rhs[k] - diag[k] * y[k]);
        for &(a, b, v) in &off {
            r[a] -= v * y[b];
            r[b] -= v * y[a];
        }
        llt.solve_in_place(r.as_mat_mut());
        let mut f = vec![f64::NAN; roles.len()];
        for (c, role) in roles.iter().enumerate() {
            f[c] = match *role {
                Role::Off => f64::NAN,
                Role::Fixed(v) => v,
                Role::Unknown(k) => (y[k] + r[k]) * (0.5 * self.u[c]).exp(),
            };
        }
        Ok(f)
    }

    /// The MFPT to the cells whose centres lie in `target`, from every cell.
    ///
    /// # Errors
    /// An empty target, or a failed factorisation.
    pub fn mfpt(&self, target: &dyn Fn(Point) -> bool) -> Result<MfptField, Fv2dError> {
        let g = self.grid;
        let mut roles: Vec<Role> = (0..g.cells())
            .map(|c| match self.allowed(c) && target(g.centre_of(c)) {
                true => Role::Fixed(0.0),
                false => Role::Off,
            })
            .collect();
        if !roles.iter().any(|r| matches!(r, Role::Fixed(_))) {
            return Err(Fv2dError::EmptyRegion {
                which: "target",
                nx: g.nx,
                ny: g.ny,
            });
        }
        let n = self.number(&mut roles);
        let mut time = self.solve(&roles, n, 1.0)?;
        for t in &mut time {
            if t.is_nan() {
                *t = f64::INFINITY;
            }
        }
        Ok(MfptField { grid: g, time })
    }

    /// The committor between the cells whose centres lie in `a` and in `b`, with the TPT rate
    /// and the reactive flux field.
    ///
    /// # Errors
    /// An empty or overlapping region, or a failed factorisation.
    pub fn committor(
        &self,
        a: &dyn Fn(Point) -> bool,
        b: &dyn Fn(Point) -> bool,
    ) -> Result<Committor, Fv2dError> {
        let g = self.grid;
        let (mut in_a, mut in_b) = (false, false);
        let mut roles = Vec::with_capacity(g.cells());
        for c in 0..g.cells() {
            let p = g.centre_of(c);
            let (ia, ib) = (a(p), b(p));
            let allowed = self.allowed(c);
            if allowed && ia && ib {
                return Err(Fv2dError::Overlap);
            }
            in_a |= allowed && ia;
            in_b |= allowed && ib;
            roles.push(match (allowed, ia, ib) {
                (true, true, _) => Role::Fixed(0.0),
                (true, _, true) => Role::Fixed(1.0),
                _ => Role::Off,
            });
        }
        for (has, which) in [(in_a, "A"), (in_b, "B")] {
            if !has {
                return Err(Fv2dError::EmptyRegion {
                    which,
                    nx: g.nx,
                    ny: g.ny,
                });
            }
        }
        let n = self.number(&mut roles);
        let q = self.solve(&roles, n, 0.0)?;
        let (hx, hy) = g.spacing();
        // Z and π_A over the cells where q is defined (the component that reaches A or B)
        let (mut z, mut last_a) = (0.0, 0.0);
        for (c, qc) in q.iter().enumerate() {
            if qc.is_finite() {
                let w = (-self.u[c]).exp();
                z += w;
                last_a += w * (1.0 - qc);
            }
        }
        let mut dirichlet = 0.0;
        for (x, y, rho) in self.bonds() {
            let dq = q[y] - q[x];
            if dq.is_finite() {
                dirichlet += rho * (-0.5 * (self.u[x] + self.u[y])).exp() * dq * dq;
            }
        }
        // the cell volume cancels in ν_AB = Σ hxhy ρ w Δq² / Σ hxhy e^{−U}
        let reactive_frequency = dirichlet / z;
        let last_in_a = last_a / z;
        let flux = self.flux(&q, z * hx * hy);
        Ok(Committor {
            grid: g,
            q,
            reactive_frequency,
            last_in_a,
            rate: reactive_frequency / last_in_a,
            flux,
        })
    }

    /// J = e^{−U} D∇q / Z per cell, ∇q by centred differences (one-sided next to a wall or an
    /// undefined neighbour); `z_volume` is Z = Σ e^{−U} hx hy.
    fn flux(&self, q: &[f64], z_volume: f64) -> Vec<[f64; 2]> {
        let g = self.grid;
        let (hx, hy) = g.spacing();
        let d = self.tensor();
        (0..g.cells())
            .map(|c| {
                if !q[c].is_finite() {
                    return [0.0; 2];
                }
                let (i, j) = (c % g.nx, c / g.nx);
                let slope = |lo: Option<usize>, hi: Option<usize>, h: f64| {
                    let lo = lo.filter(|&k| q[k].is_finite());
                    let hi = hi.filter(|&k| q[k].is_finite());
                    match (lo, hi) {
                        (Some(l), Some(r)) => (q[r] - q[l]) / (2.0 * h),
                        (Some(l), None) => (q[c] - q[l]) / h,
                        (None, Some(r)) => (q[r] - q[c]) / h,
                        (None, None) => 0.0,
                    }
                };
                let gx = slope((i > 0).then(|| c - 1), (i + 1 < g.nx).then(|| c + 1), hx);
                let gy = slope(
                    (j > 0).then(|| c - g.nx),
                    (j + 1 < g.ny).then(|| c + g.nx),
                    hy,
                );
                let w = (-self.u[c]).exp() / z_volume;
                let v = d.apply([gx, gy]);
                [w * v[0], w * v[1]]
            })
            .collect()
    }

    /// The tensor back from the stencil: D = diag(h) Σ ρ e eᵀ diag(h).
    fn tensor(&self) -> DiffusionTensor {
        let (hx, hy) = self.grid.spacing();
        let mut m = [[0.0; 2]; 2];
        for b in &self.stencil {
            let e = [b.offset[0] as f64 * hx, b.offset[1] as f64 * hy];
            for r in 0..2 {
                for s in 0..2 {
                    m[r][s] += b.conductance * e[r] * e[s];
                }
            }
        }
        DiffusionTensor(m)
    }
}

/// The MFPT from `start` to `target`, on `first` and then on ever finer grids
/// ([`Grid::refined`]) until it changes by less than `tol` (relative) between two grids.
///
/// # Errors
/// As [`Generator::mfpt`]; a start point that is forbidden or walled off; no convergence
/// before the next grid would exceed `max_cells`.
pub fn mfpt_refined(
    surface: &dyn Surface,
    d: &DiffusionTensor,
    start: Point,
    target: &dyn Fn(Point) -> bool,
    first: Grid,
    tol: f64,
    max_cells: usize,
) -> Result<MfptStudy, Fv2dError> {
    let mut steps: Vec<RefinementStep> = Vec::new();
    let mut grid = first;
    loop {
        let breakdown = |reason: String, steps: Vec<RefinementStep>| Fv2dError::Breakdown {
            reason,
            nx: grid.nx,
            ny: grid.ny,
            steps,
        };
        let field = match Generator::new(surface, d, grid)?.mfpt(target) {
            Err(Fv2dError::Solver(e)) => {
                return Err(breakdown(
                    format!("the sparse Cholesky factorisation failed ({e})"),
                    steps,
                ));
            }
            r => r?,
        };
        let time = field.at(start);
        if time == f64::INFINITY {
            return Err(Fv2dError::Start {
                x: start[0],
                y: start[1],
            });
        }
        if !(time > 0.0 && time.is_finite()) {
            return Err(breakdown(format!("T = {time}"), steps));
        }
        steps.push(RefinementStep {
            nx: grid.nx,
            ny: grid.ny,
            time,
        });
        if let [.., prev, last] = steps[..] {
            let change = (last.time - prev.time).abs() / last.time;
            if change > BREAKDOWN_CHANGE {
                return Err(breakdown(
                    format!(
                        "T went from {:.4e} to {:.4e} on refinement",
                        prev.time, last.time
                    ),
                    steps,
                ));
            }
            if change < tol {
                return Ok(study(steps, change));
            }
            if grid.refined().cells() > max_cells {
                return Err(Fv2dError::NotConverged {
                    change,
                    tol,
                    max_cells,
                    study: Box::new(study(steps, change)),
                });
            }
        }
        grid = grid.refined();
    }
}

/// The study record: the observed order from the last three grids (when their differences
/// shrink), Richardson's estimate with it.
fn study(steps: Vec<RefinementStep>, last_change: f64) -> MfptStudy {
    let time = steps[steps.len() - 1].time;
    let (mut observed_order, mut extrapolated) = (None, None);
    if let [.., s1, s2, s3] = steps[..] {
        let h = |s: RefinementStep| 1.0 / s.nx as f64;
        let (e1, e2) = (s1.time - s2.time, s2.time - s3.time);
        let ratio = e1 / e2;
        // (h1^p − h2^p)/(h2^p − h3^p) grows with p; solve for p by bisection on [0.2, 8]
        let f = |p: f64| (h(s1).powf(p) - h(s2).powf(p)) / (h(s2).powf(p) - h(s3).powf(p)) - ratio;
        if ratio.is_finite() && f(0.2) < 0.0 && f(8.0) > 0.0 {
            let (mut lo, mut hi) = (0.2, 8.0);
            for _ in 0..100 {
                let mid = 0.5 * (lo + hi);
                if f(mid) < 0.0 {
                    lo = mid;
                } else {
                    hi = mid;
                }
            }
            let p = 0.5 * (lo + hi);
            let c = e2 / (h(s2).powf(p) - h(s3).powf(p));
            observed_order = Some(p);
            extrapolated = Some(s3.time - c * h(s3).powf(p));
        }
    }
    MfptStudy {
        steps,
        time,
        last_change,
        observed_order,
        extrapolated,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::potential::surface::MullerBrown;

    /// Selling's weights rebuild the matrix (exact algebra up to rounding) and are non-negative,
    /// for a diagonal, a mildly and a strongly rotated anisotropic matrix.
    #[test]
    fn selling_rebuilds_the_matrix() {
        for (l0, l1, th) in [(1.0, 3.0, 0.0), (1.0, 3.0, 0.4), (0.05, 4.0, 1.1)] {
            let (s, c) = f64::sin_cos(th);
            let m = [
                [l0 * c * c + l1 * s * s, (l0 - l1) * c * s],
                [(l0 - l1) * c * s, l0 * s * s + l1 * c * c],
            ];
            let bonds = selling(m);
            let mut r = [[0.0; 2]; 2];
            for b in &bonds {
                assert!(b.conductance > 0.0);
                let e = [b.offset[0] as f64, b.offset[1] as f64];
                for i in 0..2 {
                    for j in 0..2 {
                        r[i][j] += b.conductance * e[i] * e[j];
                    }
                }
            }
            for i in 0..2 {
                for j in 0..2 {
                    // rounding of a few products of O(1) numbers
                    assert!((r[i][j] - m[i][j]).abs() < 1e-12, "{r:?} {m:?}");
                }
            }
        }
        // a diagonal matrix gives the 5-point stencil
        assert_eq!(selling([[2.0, 0.0], [0.0, 5.0]]).len(), 2);
    }

    /// Detailed balance of the discrete generator (exact algebra): e^{−U_i} k_ij = e^{−U_j} k_ji,
    /// Σ_i π_i (Lf)_i = 0 (π is stationary) and ⟨g, Lf⟩_π = ⟨f, Lg⟩_π, on the Müller–Brown
    /// surface with a rotated full tensor (diagonal bonds). The tolerance is rounding: sums of
    /// ~1e4 terms of size ≤ 1e3, each exact to 1e-16 relative.
    #[test]
    fn generator_is_reversible_with_boltzmann_stationary() {
        let s = MullerBrown::new(0.1);
        let d = DiffusionTensor([[1.0, 0.6], [0.6, 0.8]]);
        let op = Generator::new(&s, &d, Grid::new(s.domain, 41, 37)).unwrap();
        assert_eq!(op.stencil().len(), 3);
        let pi = op.boltzmann();
        let n = pi.len();
        let f: Vec<f64> = (0..n).map(|k| ((k * 7919) % 101) as f64 / 101.0).collect();
        let g: Vec<f64> = (0..n).map(|k| ((k * 104_729) % 97) as f64 / 97.0).collect();
        let (lf, lg) = (op.apply(&f), op.apply(&g));
        let scale: f64 = pi.iter().zip(&lf).map(|(p, l)| (p * l).abs()).sum();
        let stationary: f64 = pi.iter().zip(&lf).map(|(p, l)| p * l).sum();
        assert!(stationary.abs() < 1e-13 * scale, "{stationary} {scale}");
        let gl: f64 = (0..n).map(|k| pi[k] * g[k] * lf[k]).sum();
        let fl: f64 = (0..n).map(|k| pi[k] * f[k] * lg[k]).sum();
        assert!((gl - fl).abs() < 1e-13 * scale, "{gl} {fl}");
        // pairwise, on a few bonds along each stencil direction
        let grid = *op.grid();
        for b in op.stencil() {
            let c = grid.index(20, 18);
            let e = grid.index((20 + b.offset[0]) as usize, (18 + b.offset[1]) as usize);
            let (kf, kb) = (op.rate(c, e), op.rate(e, c));
            assert!(kf > 0.0 && kb > 0.0);
            let lhs = (-op.u(c)).exp() * kf;
            let rhs = (-op.u(e)).exp() * kb;
            assert!((lhs / rhs - 1.0).abs() < 1e-13);
        }
    }
}
