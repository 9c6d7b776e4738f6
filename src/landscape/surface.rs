//! Landscape analysis of a surface U(x, y): its minima, its index-1 saddles, the reactant and
//! product, the minimum energy path (MEP) between them with every saddle and intermediate minimum
//! on it, and the rate-limiting barrier.
//!
//! - Minima: local minima of U on a grid over the box, refined by Newton's method (a gradient
//!   step with backtracking where the Hessian is not positive definite).
//! - Saddles: grid points where |∇U| is locally smallest, refined by eigenvector following
//!   (Cerjan & Miller, J. Chem. Phys. 75, 2800 (1981): a Newton step that climbs along the lowest
//!   Hessian mode and descends along the other), kept if they converge to exactly one negative
//!   eigenvalue.
//! - Reactant and product: the minima that `start` and `target` descend to; without them the
//!   deepest minimum is the reactant and the second deepest the product.
//! - MEP: the simplified string method (E, Ren & Vanden-Eijnden, J. Chem. Phys. 126, 164103
//!   (2007); the string method, Phys. Rev. B 66, 052301 (2002)) started from the minimax path on
//!   the grid (the path whose highest point is lowest, through the sublevel set that first joins
//!   reactant and product, weighted towards low U). Images descend along the component of −∇U
//!   across the string (tangent from the neighbouring images, as in the 2002 method; the full
//!   −∇U of the simplified method leaves a fixed point biased by O(Δt·curvature·|∇U|²) when the
//!   images are redistributed by linear interpolation) and are put back at equal arc length by
//!   linear interpolation; the string has converged when the force across it is below
//!   `tolerance` × the largest |∇U| on it at every image.
//! - Along the converged MEP each local maximum of U is refined to its saddle and each interior
//!   local minimum to its minimum; the path is read as a sequence of elementary steps
//!   minimum → saddle → minimum, and the highest saddle is the rate-limiting one: the barrier is
//!   its U minus the reactant's (an intermediate minimum lower than the reactant would make the
//!   barrier from that minimum the relevant one; [`SurfaceLandscape::steps`] gives each).
//!
//! All energies in kT. Everything is deterministic (no randomness, fixed orders).

use crate::potential::surface::{Point, Rect, Surface, sym_eigen};
use serde::Serialize;
use std::cmp::Ordering;
use std::collections::BinaryHeap;
use thiserror::Error;

/// Surface-landscape problems.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum SurfaceLandscapeError {
    /// The grid scan and Newton's method found no minimum inside the box.
    #[error("the surface has no minimum inside its box")]
    NoMinimum,
    /// Only one minimum, and no target to go to.
    #[error("the surface has one minimum only (at ({x}, {y})): give a target or widen the box")]
    OneMinimum {
        /// x of the minimum
        x: f64,
        /// y of the minimum
        y: f64,
    },
    /// A start or target point outside the box, forbidden, or descending to no minimum.
    #[error("the {which} point ({x}, {y}) {why}")]
    BadPoint {
        /// "start" or "target"
        which: &'static str,
        /// x
        x: f64,
        /// y
        y: f64,
        /// what is wrong
        why: &'static str,
    },
    /// Start and target descend to the same minimum.
    #[error("start and target both descend to the minimum at ({x}, {y})")]
    SameMinimum {
        /// x of the minimum
        x: f64,
        /// y of the minimum
        y: f64,
    },
    /// Reactant and product are not joined through allowed points of the box.
    #[error("no allowed path joins the reactant and the product minima")]
    NotConnected,
    /// No saddle could be refined on the MEP.
    #[error("no saddle point found on the minimum energy path")]
    NoSaddle,
}

/// Settings of the analysis (the defaults suit a smooth surface with a few wells in its box).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SurfaceOptions {
    /// grid intervals per axis for the scans and the initial path
    pub grid: usize,
    /// images on the string
    pub images: usize,
    /// the string has converged when the force across it is below this × the largest |∇U| on it
    pub tolerance: f64,
    /// the most string iterations
    pub max_iterations: usize,
}

impl Default for SurfaceOptions {
    fn default() -> Self {
        Self {
            grid: 200,
            images: 101,
            tolerance: 1e-7,
            max_iterations: 200_000,
        }
    }
}

/// A stationary point with its Hessian's eigen-decomposition.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StationaryPoint {
    /// (x, y)
    pub position: Point,
    /// U in kT
    pub u: f64,
    /// Hessian eigenvalues, ascending (kT per length²); one negative at a saddle
    pub eigenvalues: [f64; 2],
    /// unit eigenvectors: `eigenvectors[k]` belongs to `eigenvalues[k]` (sign: first nonzero
    /// component positive)
    pub eigenvectors: [[f64; 2]; 2],
}

impl StationaryPoint {
    fn at(s: &dyn Surface, p: Point) -> Self {
        let (l, v) = sym_eigen(s.hessian(p));
        let vec = |k: usize| {
            let e = [v[0][k], v[1][k]];
            let flip = if e[0] != 0.0 { e[0] < 0.0 } else { e[1] < 0.0 };
            if flip { [-e[0], -e[1]] } else { e }
        };
        Self {
            position: p,
            u: s.u(p),
            eigenvalues: l,
            eigenvectors: [vec(0), vec(1)],
        }
    }
}

/// One elementary step along the MEP: minimum → saddle → minimum (indices into
/// [`SurfaceLandscape::minima`] and [`SurfaceLandscape::saddles`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PathStep {
    /// the minimum before the saddle
    pub from: usize,
    /// the saddle
    pub saddle: usize,
    /// the minimum after it
    pub to: usize,
    /// U(saddle) − U(from), kT
    pub forward_barrier: f64,
    /// U(saddle) − U(to), kT
    pub backward_barrier: f64,
    /// arc length of the saddle along the MEP
    pub s: f64,
    /// distance from the refined saddle to the string (linear between images)
    pub distance_to_string: f64,
}

/// A point of the MEP.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MepPoint {
    /// arc length from the reactant
    pub s: f64,
    /// (x, y)
    pub position: Point,
    /// U in kT
    pub u: f64,
}

/// The minimum energy path by the string method.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Mep {
    /// images from the reactant to the product, equally spaced in arc length
    pub points: Vec<MepPoint>,
    /// the convergence threshold (relative force across the path)
    pub tolerance: f64,
    /// the largest force across the string at the end, relative to the largest |∇U| on it
    pub residual: f64,
    /// string iterations made
    pub iterations: usize,
    /// whether the residual fell below the tolerance
    pub converged: bool,
}

impl Mep {
    /// The unit tangent of the string at the point nearest `p` (central difference of images).
    pub fn tangent_near(&self, p: Point) -> [f64; 2] {
        let n = self.points.len();
        let k = (0..n)
            .min_by(|&a, &b| {
                dist(self.points[a].position, p).total_cmp(&dist(self.points[b].position, p))
            })
            .unwrap_or(0)
            .clamp(1, n - 2);
        let (a, b) = (self.points[k - 1].position, self.points[k + 1].position);
        let d = dist(a, b);
        [(b[0] - a[0]) / d, (b[1] - a[1]) / d]
    }
}

/// The landscape of a surface.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SurfaceLandscape {
    /// every minimum found, deepest first
    pub minima: Vec<StationaryPoint>,
    /// every index-1 saddle found (on the MEP or elsewhere), lowest first
    pub saddles: Vec<StationaryPoint>,
    /// index of the reactant minimum
    pub reactant: usize,
    /// index of the product minimum
    pub product: usize,
    /// the elementary steps along the MEP, from the reactant to the product; intermediate
    /// minima are the `to` of one step and the `from` of the next
    pub steps: Vec<PathStep>,
    /// index (into `saddles`) of the highest saddle on the MEP
    pub rate_limiting_saddle: usize,
    /// U(rate-limiting saddle) − U(reactant), kT
    pub barrier: f64,
    /// U(rate-limiting saddle) − U(product), kT
    pub reverse_barrier: f64,
    /// the minimum energy path
    pub mep: Mep,
    /// the settings used
    pub options: SurfaceOptions,
}

impl SurfaceLandscape {
    /// The minima passed on the MEP between reactant and product (indices into `minima`).
    pub fn intermediate_minima(&self) -> Vec<usize> {
        self.steps.iter().skip(1).map(|st| st.from).collect()
    }
}

fn dist(a: Point, b: Point) -> f64 {
    (a[0] - b[0]).hypot(a[1] - b[1])
}

fn diag(r: Rect) -> f64 {
    (r.x.1 - r.x.0).hypot(r.y.1 - r.y.0)
}

/// The step Σ_k −(v_k·g)/λ_k v_k in the Hessian's eigenbasis (eigenvectors as columns of `v`),
/// capped at length `cap`, and its length before the cap (None if not finite).
fn eigen_step(g: [f64; 2], lam: [f64; 2], v: [[f64; 2]; 2], cap: f64) -> Option<([f64; 2], f64)> {
    let gv = [
        v[0][0] * g[0] + v[1][0] * g[1],
        v[0][1] * g[0] + v[1][1] * g[1],
    ];
    let c = [-gv[0] / lam[0], -gv[1] / lam[1]];
    let step = [
        v[0][0] * c[0] + v[0][1] * c[1],
        v[1][0] * c[0] + v[1][1] * c[1],
    ];
    let len = step[0].hypot(step[1]);
    if !len.is_finite() {
        return None;
    }
    let f = if len > cap { cap / len } else { 1.0 };
    Some(([f * step[0], f * step[1]], len))
}

/// Newton's method for a minimum from `p`, with a gradient step where the Hessian is not
/// positive definite, steps capped at 2% of the box diagonal and halved until U decreases.
/// None if it leaves the allowed region or does not settle.
fn refine_min(s: &dyn Surface, mut p: Point) -> Option<Point> {
    let cap = 0.02 * diag(s.domain());
    let mut u = s.u(p);
    for _ in 0..2000 {
        let g = s.grad(p);
        let (l, v) = sym_eigen(s.hessian(p));
        // Newton where the Hessian is positive definite, else a gradient step scaled by 1/|λ|max
        let lam = if l[0] > 0.0 {
            l
        } else {
            [l[1].abs().max(l[0].abs()).max(f64::MIN_POSITIVE); 2]
        };
        let (mut step, len) = eigen_step(g, lam, v, cap)?;
        if len <= 1e-10 * cap {
            // Newton converges quadratically: the last step leaves an error far below its size
            let q = [p[0] + step[0], p[1] + step[1]];
            return (l[0] > 0.0 && s.allowed(q)).then_some(q);
        }
        let mut moved = false;
        for _ in 0..60 {
            let q = [p[0] + step[0], p[1] + step[1]];
            let uq = if s.allowed(q) { s.u(q) } else { f64::INFINITY };
            // U is flat to rounding near the minimum: allow a rise of a few ulps
            if uq <= u + 1e-13 * (1.0 + u.abs()) {
                (p, u, moved) = (q, uq, q != p);
                break;
            }
            step = [0.5 * step[0], 0.5 * step[1]];
        }
        if !moved {
            // no step lowers U in floating point: converged if the Hessian says minimum
            return (l[0] > 0.0).then_some(p);
        }
    }
    None
}

/// Eigenvector following from `p` to an index-1 saddle (steps capped at 2% of the box
/// diagonal); None if it leaves the allowed region, does not settle, or ends elsewhere than at
/// one negative eigenvalue.
fn refine_saddle(s: &dyn Surface, mut p: Point) -> Option<Point> {
    let cap = 0.02 * diag(s.domain());
    for _ in 0..500 {
        let g = s.grad(p);
        let (l, v) = sym_eigen(s.hessian(p));
        // climb along the lowest mode, descend along the other
        let floor = 1e-10 * l[0].abs().max(l[1].abs());
        let lam = [-l[0].abs().max(floor), l[1].abs().max(floor)];
        let (step, len) = eigen_step(g, lam, v, cap)?;
        if len <= 1e-10 * cap {
            let q = [p[0] + step[0], p[1] + step[1]];
            return (l[0] < 0.0 && l[1] > 0.0 && s.allowed(q)).then_some(q);
        }
        p = [p[0] + step[0], p[1] + step[1]];
        if !s.allowed(p) {
            return None;
        }
    }
    None
}

/// U on the scan grid (+inf where forbidden), nx = ny = n + 1 nodes.
struct Scan {
    n: usize,
    x: Vec<f64>,
    y: Vec<f64>,
    u: Vec<f64>,
}

impl Scan {
    fn new(s: &dyn Surface, n: usize) -> Self {
        let r = s.domain();
        let axis = |(lo, hi): (f64, f64)| -> Vec<f64> {
            (0..=n)
                .map(|k| lo + (hi - lo) * k as f64 / n as f64)
                .collect()
        };
        let (x, y) = (axis(r.x), axis(r.y));
        let mut u = Vec::with_capacity((n + 1) * (n + 1));
        for &yj in &y {
            for &xi in &x {
                let p = [xi, yj];
                let v = if s.allowed(p) { s.u(p) } else { f64::INFINITY };
                u.push(if v.is_nan() { f64::INFINITY } else { v });
            }
        }
        Self { n, x, y, u }
    }
    fn point(&self, k: usize) -> Point {
        [self.x[k % (self.n + 1)], self.y[k / (self.n + 1)]]
    }
    /// The 8 neighbours of node k.
    fn neighbours(&self, k: usize) -> impl Iterator<Item = usize> + '_ {
        let m = self.n as isize + 1;
        let (i, j) = ((k as isize) % m, (k as isize) / m);
        (-1..=1)
            .flat_map(move |dj| (-1..=1).map(move |di| (i + di, j + dj)))
            .filter(move |&(a, b)| (a, b) != (i, j) && a >= 0 && b >= 0 && a < m && b < m)
            .map(move |(a, b)| (a + m * b) as usize)
    }
    /// The allowed node nearest to p.
    fn nearest(&self, p: Point) -> usize {
        (0..self.u.len())
            .filter(|&k| self.u[k].is_finite())
            .min_by(|&a, &b| dist(self.point(a), p).total_cmp(&dist(self.point(b), p)))
            .unwrap_or(0)
    }
}

/// Adds `p` to `list` unless a point within `tol` is there; returns its index.
fn insert(list: &mut Vec<Point>, p: Point, tol: f64) -> usize {
    match list.iter().position(|&q| dist(q, p) < tol) {
        Some(k) => k,
        None => {
            list.push(p);
            list.len() - 1
        }
    }
}

/// Union–find root with path halving.
fn root(parent: &mut [usize], mut k: usize) -> usize {
    while parent[k] != k {
        parent[k] = parent[parent[k]];
        k = parent[k];
    }
    k
}

/// A heap entry ordered by smallest cost first, then by node (deterministic ties).
#[derive(PartialEq)]
struct Entry(f64, usize);
impl Eq for Entry {}
impl Ord for Entry {
    fn cmp(&self, o: &Self) -> Ordering {
        o.0.total_cmp(&self.0).then(o.1.cmp(&self.1))
    }
}
impl PartialOrd for Entry {
    fn partial_cmp(&self, o: &Self) -> Option<Ordering> {
        Some(self.cmp(o))
    }
}

/// The minimax path on the grid from node a to node b: the lowest level U* at which the sublevel
/// set joins them (nodes added in order of U, union–find), then the path in that set with the
/// least Σ ds·(0.05 + (U − U_lo)/(U* − U_lo)), so it follows valleys below U*.
fn minimax_path(scan: &Scan, a: usize, b: usize) -> Option<Vec<Point>> {
    let nn = scan.u.len();
    let mut order: Vec<usize> = (0..nn).filter(|&k| scan.u[k].is_finite()).collect();
    order.sort_by(|&p, &q| scan.u[p].total_cmp(&scan.u[q]).then(p.cmp(&q)));
    let mut parent: Vec<usize> = (0..nn).collect();
    let mut added = vec![false; nn];
    let mut level = None;
    for &k in &order {
        added[k] = true;
        for m in scan.neighbours(k).collect::<Vec<_>>() {
            if added[m] {
                let (rk, rm) = (root(&mut parent, k), root(&mut parent, m));
                parent[rk] = rm;
            }
        }
        if added[a] && added[b] && root(&mut parent, a) == root(&mut parent, b) {
            level = Some(scan.u[k]);
            break;
        }
    }
    let top = level?;
    let lo = scan.u[order[0]];
    let w = |k: usize| 0.05 + (scan.u[k] - lo) / (top - lo).max(f64::MIN_POSITIVE);
    let mut cost = vec![f64::INFINITY; nn];
    let mut prev = vec![usize::MAX; nn];
    let mut heap = BinaryHeap::new();
    cost[a] = 0.0;
    heap.push(Entry(0.0, a));
    while let Some(Entry(c, k)) = heap.pop() {
        if k == b {
            break;
        }
        if c > cost[k] {
            continue;
        }
        for m in scan.neighbours(k) {
            if scan.u[m] > top {
                continue;
            }
            let nc = c + dist(scan.point(k), scan.point(m)) * 0.5 * (w(k) + w(m));
            if nc < cost[m] {
                cost[m] = nc;
                prev[m] = k;
                heap.push(Entry(nc, m));
            }
        }
    }
    let mut path = vec![scan.point(b)];
    let mut k = b;
    while k != a {
        k = prev[k];
        if k == usize::MAX {
            return None;
        }
        path.push(scan.point(k));
    }
    path.reverse();
    Some(path)
}

/// Cumulative arc length of a polyline.
fn arc(path: &[Point]) -> Vec<f64> {
    let mut s = vec![0.0];
    for w in path.windows(2) {
        s.push(s[s.len() - 1] + dist(w[0], w[1]));
    }
    s
}

/// `m` points equally spaced in arc length along a polyline (linear interpolation).
fn resample(path: &[Point], m: usize) -> Vec<Point> {
    let s = arc(path);
    let total = s[s.len() - 1];
    let mut k = 0;
    (0..m)
        .map(|i| {
            let t = total * i as f64 / (m - 1) as f64;
            while k + 2 < s.len() && s[k + 1] < t {
                k += 1;
            }
            let f = if s[k + 1] > s[k] {
                ((t - s[k]) / (s[k + 1] - s[k])).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let (a, b) = (path[k], path[k + 1]);
            [a[0] + f * (b[0] - a[0]), a[1] + f * (b[1] - a[1])]
        })
        .collect()
}

/// The largest |eigenvalue| of the Hessian over the images (the stiffness that bounds the step).
fn stiffness(s: &dyn Surface, phi: &[Point]) -> f64 {
    phi.iter()
        .map(|&p| {
            let (l, _) = sym_eigen(s.hessian(p));
            l[0].abs().max(l[1].abs())
        })
        .filter(|v| v.is_finite())
        .fold(f64::MIN_POSITIVE, f64::max)
}

/// The string method between fixed end points, from an initial polyline.
fn string_method(s: &dyn Surface, init: &[Point], o: &SurfaceOptions) -> Mep {
    let r = s.domain();
    let mut phi = resample(init, o.images.max(3));
    let m = phi.len();
    // explicit Euler is stable for Δt < 2/λ_max (0.5/λ_max leaves room for λ to grow); the
    // tangent taken from the neighbours also needs the flow along the string to stay below a
    // twentieth of the image spacing per step (a CFL condition; at a fifth kinks grew on the bent
    // valley of tests/surface_landscape.rs)
    let mut stiff = 0.5 / stiffness(s, &phi);
    let mut fmax_prev = phi
        .iter()
        .map(|&p| {
            let g = s.grad(p);
            g[0].hypot(g[1])
        })
        .filter(|v| v.is_finite())
        .fold(f64::MIN_POSITIVE, f64::max);
    let mut residual = f64::INFINITY;
    let mut iterations = 0;
    while iterations < o.max_iterations {
        iterations += 1;
        let ds = arc(&phi)[m - 1] / (m - 1) as f64;
        let dt = stiff.min(0.05 * ds / fmax_prev);
        let mut next = phi.clone();
        let (mut fmax, mut fperp): (f64, f64) = (0.0, 0.0);
        for (i, q) in next.iter_mut().enumerate().take(m - 1).skip(1) {
            let g = s.grad(phi[i]);
            // the force across the string: ∇U minus its part along the central-difference tangent
            let d = [phi[i + 1][0] - phi[i - 1][0], phi[i + 1][1] - phi[i - 1][1]];
            let len = d[0].hypot(d[1]).max(f64::MIN_POSITIVE);
            let t = [d[0] / len, d[1] / len];
            let along = g[0] * t[0] + g[1] * t[1];
            let gp = [g[0] - along * t[0], g[1] - along * t[1]];
            fmax = fmax.max(g[0].hypot(g[1]));
            fperp = fperp.max(gp[0].hypot(gp[1]));
            let c = [
                (phi[i][0] - dt * gp[0]).clamp(r.x.0, r.x.1),
                (phi[i][1] - dt * gp[1]).clamp(r.y.0, r.y.1),
            ];
            if s.allowed(c) && c[0].is_finite() && c[1].is_finite() {
                *q = c;
            }
        }
        fmax_prev = fmax.max(f64::MIN_POSITIVE);
        residual = fperp / fmax_prev;
        if residual < o.tolerance {
            break;
        }
        phi = resample(&next, m);
        if iterations % 1000 == 0 {
            stiff = 0.5 / stiffness(s, &phi);
        }
    }
    let sl = arc(&phi);
    Mep {
        points: phi
            .iter()
            .zip(&sl)
            .map(|(&p, &sv)| MepPoint {
                s: sv,
                position: p,
                u: s.u(p),
            })
            .collect(),
        tolerance: o.tolerance,
        residual,
        iterations,
        converged: residual < o.tolerance,
    }
}

/// Distance from p to a polyline.
fn distance_to_polyline(p: Point, path: &[Point]) -> f64 {
    path.windows(2)
        .map(|w| {
            let (a, b) = (w[0], w[1]);
            let d = [b[0] - a[0], b[1] - a[1]];
            let l2 = d[0] * d[0] + d[1] * d[1];
            let t = if l2 > 0.0 {
                (((p[0] - a[0]) * d[0] + (p[1] - a[1]) * d[1]) / l2).clamp(0.0, 1.0)
            } else {
                0.0
            };
            dist(p, [a[0] + t * d[0], a[1] + t * d[1]])
        })
        .fold(f64::INFINITY, f64::min)
}

/// The minimum a point descends to, as an index into `minima` (added if new).
fn descend(
    s: &dyn Surface,
    p: Point,
    which: &'static str,
    minima: &mut Vec<Point>,
    tol: f64,
) -> Result<usize, SurfaceLandscapeError> {
    let bad = |why| SurfaceLandscapeError::BadPoint {
        which,
        x: p[0],
        y: p[1],
        why,
    };
    if !s.allowed(p) {
        return Err(bad("lies outside the box or in its forbidden part"));
    }
    let m = refine_min(s, p).ok_or(bad("descends to no minimum inside the box"))?;
    Ok(insert(minima, m, tol))
}

/// Analyses a surface with the default settings; see [`analyse_surface_with`].
///
/// # Errors
/// See [`analyse_surface_with`].
pub fn analyse_surface(
    s: &dyn Surface,
    start: Option<Point>,
    target: Option<Point>,
) -> Result<SurfaceLandscape, SurfaceLandscapeError> {
    analyse_surface_with(s, start, target, &SurfaceOptions::default())
}

/// Minima, saddles, reactant and product, the MEP between them and the barrier (module doc).
///
/// # Errors
/// No minimum; one minimum and no target; a start or target point outside the box, forbidden
/// or descending to no minimum; start and target in one basin; reactant and product not joined
/// through allowed points; no saddle on the MEP.
pub fn analyse_surface_with(
    s: &dyn Surface,
    start: Option<Point>,
    target: Option<Point>,
    o: &SurfaceOptions,
) -> Result<SurfaceLandscape, SurfaceLandscapeError> {
    let tol = 1e-7 * diag(s.domain());
    let scan = Scan::new(s, o.grid.max(4));
    let nn = scan.u.len();
    // minima: grid local minima refined by Newton
    let mut minima: Vec<Point> = Vec::new();
    let mut saddle_pts: Vec<Point> = Vec::new();
    let gnorm: Vec<f64> = (0..nn)
        .map(|k| {
            let g = s.grad(scan.point(k));
            let v = g[0].hypot(g[1]);
            if scan.u[k].is_finite() && v.is_finite() {
                v
            } else {
                f64::INFINITY
            }
        })
        .collect();
    for k in 0..nn {
        if !scan.u[k].is_finite() {
            continue;
        }
        let lowest = scan.neighbours(k).all(|m| scan.u[k] <= scan.u[m]);
        let highest = scan.neighbours(k).all(|m| scan.u[k] >= scan.u[m]);
        if lowest {
            if let Some(p) = refine_min(s, scan.point(k)) {
                insert(&mut minima, p, tol);
            }
        } else if !highest
            && scan.neighbours(k).all(|m| gnorm[k] <= gnorm[m])
            && let Some(p) = refine_saddle(s, scan.point(k))
        {
            insert(&mut saddle_pts, p, tol);
        }
    }
    let by_u = |list: &mut Vec<Point>| {
        list.sort_by(|a, b| {
            s.u(*a)
                .total_cmp(&s.u(*b))
                .then(a[0].total_cmp(&b[0]))
                .then(a[1].total_cmp(&b[1]))
        })
    };
    by_u(&mut minima);
    let (reactant, product) = {
        let r = match start {
            Some(p) => descend(s, p, "start", &mut minima, tol)?,
            None if minima.is_empty() => return Err(SurfaceLandscapeError::NoMinimum),
            None => 0,
        };
        let t = match target {
            Some(p) => descend(s, p, "target", &mut minima, tol)?,
            None => match (0..minima.len()).find(|&k| k != r) {
                Some(k) => k,
                None => {
                    return Err(SurfaceLandscapeError::OneMinimum {
                        x: minima[r][0],
                        y: minima[r][1],
                    });
                }
            },
        };
        if r == t {
            return Err(SurfaceLandscapeError::SameMinimum {
                x: minima[r][0],
                y: minima[r][1],
            });
        }
        (minima[r], minima[t])
    };
    // MEP from the minimax grid path between the two minima
    let (a, b) = (scan.nearest(reactant), scan.nearest(product));
    let mut init = minimax_path(&scan, a, b).ok_or(SurfaceLandscapeError::NotConnected)?;
    init[0] = reactant;
    let last = init.len() - 1;
    init[last] = product;
    let mep = string_method(s, &init, o);
    let pts: Vec<Point> = mep.points.iter().map(|q| q.position).collect();
    // walk the path: maxima → saddles, interior minima → minima
    let mut chain_min = vec![insert(&mut minima, reactant, tol)];
    let mut chain_saddle: Vec<(usize, f64)> = Vec::new();
    let us: Vec<f64> = mep.points.iter().map(|q| q.u).collect();
    for i in 1..us.len() - 1 {
        if us[i] > us[i - 1] && us[i] >= us[i + 1] {
            if let Some(p) = refine_saddle(s, pts[i]) {
                let k = insert(&mut saddle_pts, p, tol);
                if chain_saddle.len() == chain_min.len() - 1 {
                    chain_saddle.push((k, mep.points[i].s));
                }
            }
        } else if us[i] < us[i - 1]
            && us[i] <= us[i + 1]
            && chain_saddle.len() == chain_min.len()
            && let Some(p) = refine_min(s, pts[i])
        {
            chain_min.push(insert(&mut minima, p, tol));
        }
    }
    let end = insert(&mut minima, product, tol);
    if chain_saddle.len() == chain_min.len() {
        chain_min.push(end);
    } else if let Some(last) = chain_min.last_mut() {
        // a shallow dip after the last saddle that refined onto the product itself
        *last = end;
    }
    if chain_saddle.is_empty() {
        return Err(SurfaceLandscapeError::NoSaddle);
    }
    // final ordering: minima deepest first, saddles lowest first; map the chain's indices
    let sorted = |list: &Vec<Point>| -> Vec<usize> {
        let mut idx: Vec<usize> = (0..list.len()).collect();
        idx.sort_by(|&a, &b| {
            s.u(list[a])
                .total_cmp(&s.u(list[b]))
                .then(list[a][0].total_cmp(&list[b][0]))
                .then(list[a][1].total_cmp(&list[b][1]))
        });
        let mut rank = vec![0; list.len()];
        for (r, &k) in idx.iter().enumerate() {
            rank[k] = r;
        }
        rank
    };
    let (rank_min, rank_sad) = (sorted(&minima), sorted(&saddle_pts));
    let mut min_out = vec![StationaryPoint::at(s, minima[0]); minima.len()];
    for (k, &p) in minima.iter().enumerate() {
        min_out[rank_min[k]] = StationaryPoint::at(s, p);
    }
    let mut sad_out = vec![StationaryPoint::at(s, saddle_pts[0]); saddle_pts.len()];
    for (k, &p) in saddle_pts.iter().enumerate() {
        sad_out[rank_sad[k]] = StationaryPoint::at(s, p);
    }
    let steps: Vec<PathStep> = chain_saddle
        .iter()
        .enumerate()
        .map(|(n, &(k, sv))| {
            let (from, to, sd) = (
                rank_min[chain_min[n]],
                rank_min[chain_min[n + 1]],
                rank_sad[k],
            );
            let us = sad_out[sd].u;
            PathStep {
                from,
                saddle: sd,
                to,
                forward_barrier: us - min_out[from].u,
                backward_barrier: us - min_out[to].u,
                s: sv,
                distance_to_string: distance_to_polyline(sad_out[sd].position, &pts),
            }
        })
        .collect();
    let top = steps
        .iter()
        .max_by(|a, b| sad_out[a.saddle].u.total_cmp(&sad_out[b.saddle].u))
        .map_or(0, |st| st.saddle);
    let (r, p) = (rank_min[chain_min[0]], rank_min[end]);
    Ok(SurfaceLandscape {
        barrier: sad_out[top].u - min_out[r].u,
        reverse_barrier: sad_out[top].u - min_out[p].u,
        minima: min_out,
        saddles: sad_out,
        reactant: r,
        product: p,
        steps,
        rate_limiting_saddle: top,
        mep,
        options: *o,
    })
}
