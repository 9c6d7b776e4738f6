//! Surfaces U(x, y) of two coordinates in internal units (energies in kT, lengths in the
//! scenario's length unit), behind one trait that gives U, its gradient and its Hessian, on a
//! rectangular box with reflecting walls; and the constant diffusion tensor that goes with them.
//!
//! A surface may forbid part of its box (a grid table with missing corners: U = +∞ there);
//! [`Surface::allowed`] tells, and every user of a surface treats a forbidden point as a wall.
//!
//! [`FormulaSurface`] is a user formula f(x, y) with exact symbolic partials; the grid table is
//! [`super::grid::GridSurface`].
//!
//! [`MullerBrown`] is the four-Gaussian test surface of Müller & Brown (Theor. Chim. Acta 53, 75
//! (1979)), U = Σ_k A_k exp(a_k (x − x_k)² + b_k (x − x_k)(y − y_k) + c_k (y − y_k)²), with the
//! published parameters, scaled from its energy unit to kT.

use super::formula::Formula2;
use std::fmt::Debug;

/// A point (x, y).
pub type Point = [f64; 2];

/// A symmetric 2x2 matrix [[xx, xy], [xy, yy]] (a Hessian or a diffusion tensor).
pub type Sym2 = [[f64; 2]; 2];

/// The box [x_lo, x_hi] × [y_lo, y_hi] with reflecting walls.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rect {
    /// x range
    pub x: (f64, f64),
    /// y range
    pub y: (f64, f64),
}

impl Rect {
    /// Whether `p` lies in the box (edges included).
    pub fn contains(&self, p: Point) -> bool {
        (self.x.0..=self.x.1).contains(&p[0]) && (self.y.0..=self.y.1).contains(&p[1])
    }
}

/// A potential of two coordinates on a box with reflecting walls.
pub trait Surface: Send + Sync + Debug {
    /// U(x, y) in kT (+∞ where forbidden).
    fn u(&self, p: Point) -> f64;
    /// (∂U/∂x, ∂U/∂y) in kT per length.
    fn grad(&self, p: Point) -> [f64; 2];
    /// The Hessian in kT per length².
    fn hessian(&self, p: Point) -> Sym2;
    /// The box.
    fn domain(&self) -> Rect;
    /// False where the surface forbids the point (U = +∞); the box's interior is allowed unless
    /// the surface says otherwise.
    fn allowed(&self, p: Point) -> bool {
        self.domain().contains(p)
    }
}

/// A constant diffusion tensor (length²/time): symmetric and positive definite.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DiffusionTensor(pub Sym2);

impl DiffusionTensor {
    /// An isotropic D.
    pub fn scalar(d: f64) -> Self {
        Self([[d, 0.0], [0.0, d]])
    }
    /// diag(dx, dy).
    pub fn diagonal(dx: f64, dy: f64) -> Self {
        Self([[dx, 0.0], [0.0, dy]])
    }
    /// Whether the tensor is symmetric positive definite (Sylvester's criterion).
    pub fn is_positive_definite(&self) -> bool {
        let m = self.0;
        m[0][1] == m[1][0] && m[0][0] > 0.0 && m[0][0] * m[1][1] - m[0][1] * m[1][0] > 0.0
    }
    /// D·v.
    pub fn apply(&self, v: [f64; 2]) -> [f64; 2] {
        let m = self.0;
        [
            m[0][0] * v[0] + m[0][1] * v[1],
            m[1][0] * v[0] + m[1][1] * v[1],
        ]
    }
}

/// Eigenvalues (ascending) and unit eigenvectors (as columns, matching) of a symmetric 2x2
/// matrix, in closed form.
pub fn sym_eigen(m: Sym2) -> ([f64; 2], [[f64; 2]; 2]) {
    let (a, b, d) = (m[0][0], 0.5 * (m[0][1] + m[1][0]), m[1][1]);
    let mean = 0.5 * (a + d);
    let r = (0.25 * (a - d) * (a - d) + b * b).sqrt();
    let (l0, l1) = (mean - r, mean + r);
    // the eigenvector of the smaller eigenvalue; θ from tan 2θ = 2b/(a − d)
    let theta = 0.5 * (2.0 * b).atan2(a - d);
    let (s, c) = theta.sin_cos();
    // (c, s) belongs to the larger eigenvalue
    ([l0, l1], [[-s, c], [c, s]])
}

/// The Müller–Brown surface in its own energy unit, multiplied by `scale` (kT per that unit).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MullerBrown {
    /// kT per energy unit of the published parameters
    pub scale: f64,
    /// the box
    pub domain: Rect,
}

/// The published parameters (A, a, b, c, x0, y0) of the four terms.
const MB: [[f64; 6]; 4] = [
    [-200.0, -1.0, 0.0, -10.0, 1.0, 0.0],
    [-100.0, -1.0, 0.0, -10.0, 0.0, 0.5],
    [-170.0, -6.5, 11.0, -6.5, -0.5, 1.5],
    [15.0, 0.7, 0.6, 0.7, -1.0, 1.0],
];

impl MullerBrown {
    /// The box used for pictures of the surface in the literature, [−1.5, 1.2] × [−0.5, 2.0].
    pub fn new(scale: f64) -> Self {
        Self {
            scale,
            domain: Rect {
                x: (-1.5, 1.2),
                y: (-0.5, 2.0),
            },
        }
    }
    /// (value, gradient, Hessian) in the published unit.
    fn terms(p: Point) -> (f64, [f64; 2], Sym2) {
        let (mut u, mut g, mut h) = (0.0, [0.0; 2], [[0.0; 2]; 2]);
        for [aa, a, b, c, x0, y0] in MB {
            let (dx, dy) = (p[0] - x0, p[1] - y0);
            let e = aa * (a * dx * dx + b * dx * dy + c * dy * dy).exp();
            let (ex, ey) = (2.0 * a * dx + b * dy, b * dx + 2.0 * c * dy);
            u += e;
            g[0] += e * ex;
            g[1] += e * ey;
            h[0][0] += e * (ex * ex + 2.0 * a);
            h[0][1] += e * (ex * ey + b);
            h[1][1] += e * (ey * ey + 2.0 * c);
        }
        h[1][0] = h[0][1];
        (u, g, h)
    }
}

impl Surface for MullerBrown {
    fn u(&self, p: Point) -> f64 {
        self.scale * Self::terms(p).0
    }
    fn grad(&self, p: Point) -> [f64; 2] {
        let g = Self::terms(p).1;
        [self.scale * g[0], self.scale * g[1]]
    }
    fn hessian(&self, p: Point) -> Sym2 {
        let h = Self::terms(p).2;
        let s = self.scale;
        [[s * h[0][0], s * h[0][1]], [s * h[1][0], s * h[1][1]]]
    }
    fn domain(&self) -> Rect {
        self.domain
    }
}

/// A user formula f(x, y), scaled from the scenario's energy unit to kT.
#[derive(Debug, Clone)]
pub struct FormulaSurface {
    formula: Formula2,
    scale: f64,
    domain: Rect,
}

impl FormulaSurface {
    /// `scale` multiplies the formula's value to give kT (1 / kT-in-energy-unit).
    pub fn new(formula: Formula2, scale: f64, domain: Rect) -> Self {
        Self {
            formula,
            scale,
            domain,
        }
    }
    /// The formula as written.
    pub fn formula(&self) -> &Formula2 {
        &self.formula
    }
}

impl Surface for FormulaSurface {
    fn u(&self, p: Point) -> f64 {
        self.scale * self.formula.value(p[0], p[1])
    }
    fn grad(&self, p: Point) -> [f64; 2] {
        self.formula.gradient(p[0], p[1]).map(|g| self.scale * g)
    }
    fn hessian(&self, p: Point) -> Sym2 {
        self.formula
            .hessian(p[0], p[1])
            .map(|row| row.map(|h| self.scale * h))
    }
    fn domain(&self) -> Rect {
        self.domain
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Central differences of the value agree with the analytic gradient and Hessian; the step
    /// 1e-5 leaves a truncation error ~h² |U'''| ≈ 1e-10·1e5 and a rounding error ~1e-16·|U|/h,
    /// both far below the 1e-5 relative tolerance.
    #[test]
    fn muller_brown_derivatives_match_differences() {
        let s = MullerBrown::new(1.0);
        let h = 1e-5;
        for p in [[-0.55, 1.44], [0.62, 0.03], [-0.05, 0.47], [0.2, 0.3]] {
            let g = s.grad(p);
            let gx = (s.u([p[0] + h, p[1]]) - s.u([p[0] - h, p[1]])) / (2.0 * h);
            let gy = (s.u([p[0], p[1] + h]) - s.u([p[0], p[1] - h])) / (2.0 * h);
            let scale = 1.0 + g[0].abs().max(g[1].abs());
            assert!((g[0] - gx).abs() < 1e-5 * scale && (g[1] - gy).abs() < 1e-5 * scale);
            let hm = s.hessian(p);
            let hxy = (s.grad([p[0], p[1] + h])[0] - s.grad([p[0], p[1] - h])[0]) / (2.0 * h);
            let hxx = (s.grad([p[0] + h, p[1]])[0] - s.grad([p[0] - h, p[1]])[0]) / (2.0 * h);
            let hs = 1.0 + hm[0][0].abs().max(hm[1][1].abs());
            assert!((hm[0][1] - hxy).abs() < 1e-5 * hs && (hm[0][0] - hxx).abs() < 1e-5 * hs);
        }
    }

    /// A rotated diagonal matrix gives back its eigenvalues and eigenvectors (exact algebra).
    #[test]
    fn eigen_of_rotated_diagonal() {
        let (l0, l1, th) = (-2.0_f64, 5.0_f64, 0.3_f64);
        let (s, c) = th.sin_cos();
        // R diag(l0, l1) Rᵀ with the l0 eigenvector (c, s)
        let m = [
            [l0 * c * c + l1 * s * s, (l0 - l1) * c * s],
            [(l0 - l1) * c * s, l0 * s * s + l1 * c * c],
        ];
        let (l, v) = sym_eigen(m);
        assert!((l[0] - l0).abs() < 1e-12 && (l[1] - l1).abs() < 1e-12);
        let v0 = [v[0][0], v[1][0]];
        assert!((v0[0] * c + v0[1] * s).abs() > 1.0 - 1e-12);
    }
}
