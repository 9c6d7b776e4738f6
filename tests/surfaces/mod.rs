//! Test surfaces shared by tests/surface_sim.rs, tests/surface_theory.rs and benches/plane.rs (included with `mod` /
//! `#[path]`): a separable double well and a double well along an arc.
#![allow(dead_code)]

use escapade::potential::surface::{Point, Rect, Surface, Sym2};

/// U = E (x² − 1)² + k y²/2 (separable).
#[derive(Debug, Clone)]
pub struct Separable {
    /// barrier E
    pub e: f64,
    /// transverse stiffness k
    pub k: f64,
    /// the box
    pub domain: Rect,
}

impl Separable {
    /// The box [−2, 4] × [−1.5, 1.5]: the line x = 1 is its midline, on the FV cell centres.
    pub fn new(e: f64, k: f64) -> Self {
        Self {
            e,
            k,
            domain: Rect {
                x: (-2.0, 4.0),
                y: (-1.5, 1.5),
            },
        }
    }
}

impl Surface for Separable {
    fn u(&self, p: Point) -> f64 {
        let w = p[0] * p[0] - 1.0;
        self.e * w * w + 0.5 * self.k * p[1] * p[1]
    }
    fn grad(&self, p: Point) -> [f64; 2] {
        [4.0 * self.e * p[0] * (p[0] * p[0] - 1.0), self.k * p[1]]
    }
    fn hessian(&self, p: Point) -> Sym2 {
        [
            [4.0 * self.e * (3.0 * p[0] * p[0] - 1.0), 0.0],
            [0.0, self.k],
        ]
    }
    fn domain(&self) -> Rect {
        self.domain
    }
}

/// A double well along an arc: U = E [(x² − 1)² + κ g²], g = y − α(x² − 1) − βx. Minima at
/// (±1, ±β) (U = 0), saddle at (0, −α) (U = E): the valley bends (non-separable), and the
/// Hessians at minima and saddle are not diagonal.
#[derive(Debug, Clone)]
pub struct Arc {
    /// barrier E
    pub e: f64,
    /// the box
    pub domain: Rect,
}

impl Arc {
    /// The box [−2, 2.5]².
    pub fn new(e: f64) -> Self {
        Self {
            e,
            domain: Rect {
                x: (-2.0, 2.5),
                y: (-2.0, 2.5),
            },
        }
    }
}

pub const KAPPA: f64 = 1.5;
pub const ALPHA: f64 = 0.4;
pub const BETA: f64 = 0.5;

impl Surface for Arc {
    fn u(&self, p: Point) -> f64 {
        let [x, y] = p;
        let w = x * x - 1.0;
        let g = y - ALPHA * w - BETA * x;
        self.e * (w * w + KAPPA * g * g)
    }
    fn grad(&self, p: Point) -> [f64; 2] {
        let [x, y] = p;
        let w = x * x - 1.0;
        let g = y - ALPHA * w - BETA * x;
        let gx = -2.0 * ALPHA * x - BETA;
        [
            self.e * (4.0 * x * w + 2.0 * KAPPA * g * gx),
            self.e * 2.0 * KAPPA * g,
        ]
    }
    fn hessian(&self, p: Point) -> Sym2 {
        let [x, y] = p;
        let w = x * x - 1.0;
        let g = y - ALPHA * w - BETA * x;
        let gx = -2.0 * ALPHA * x - BETA;
        let xx = 12.0 * x * x - 4.0 + 2.0 * KAPPA * (gx * gx - 2.0 * ALPHA * g);
        let xy = 2.0 * KAPPA * gx;
        [
            [self.e * xx, self.e * xy],
            [self.e * xy, self.e * 2.0 * KAPPA],
        ]
    }
    fn domain(&self) -> Rect {
        self.domain
    }
}
