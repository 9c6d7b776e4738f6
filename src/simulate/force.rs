//! Forces for the inner loop. Built-in families evaluate their closed forms; formulas and tables
//! are tabulated once on a uniform grid as a cubic Hermite interpolant of U' that uses the exact
//! U'' at the nodes (from the symbolic derivative or the spline), so no interpreter runs per step.
//! The grid is refined until the interpolation error, measured at every interval midpoint against
//! the exact U', is below [`FORCE_TOL`] of the largest |U'| on the domain (Hermite error
//! ≤ h⁴ max|U⁽⁵⁾|/384; de Boor, ch. IV). The bound achieved is reported.

use crate::potential::{Diffusion, Family, Potential};
use std::f64::consts::PI;

/// Relative force-interpolation tolerance (of max |U'| on the domain): far below the O(dt)
/// integrator error of any usable time step.
pub const FORCE_TOL: f64 = 1e-7;
/// Largest grid (2^22 intervals, 64 MiB): beyond this the error is reported as it is.
pub const MAX_GRID_LOG2: u32 = 22;

/// The force −U'(x) (kT per length) as the inner loop sees it.
pub trait Force: Sync + Send {
    /// −U'(x)
    fn force(&self, x: f64) -> f64;
}

impl Force for Family {
    #[inline(always)]
    fn force(&self, x: f64) -> f64 {
        match *self {
            Family::DoubleWell { eb, a, .. } => {
                let s = x / a;
                -4.0 * eb * s * (s * s - 1.0) / a
            }
            Family::Cubic { eb, l, .. } => {
                let s = x / l;
                -6.75 * eb * s * (2.0 - 3.0 * s) / l
            }
            Family::Washboard {
                amp, period, tilt, ..
            } => {
                let k = 2.0 * PI / period;
                tilt - amp * k * (k * x).sin()
            }
        }
    }
}

/// A uniform-grid cubic Hermite table of a function and its derivative.
#[derive(Debug, Clone)]
pub struct Grid {
    lo: f64,
    inv_h: f64,
    last: usize,
    /// per node: [value, derivative × h]
    nodes: Vec<[f64; 2]>,
    /// the largest midpoint error found, relative to the largest |value|
    pub rel_error: f64,
}

impl Grid {
    /// Tabulates `f` (with derivative `df`) on [lo, hi], refining until the midpoint error is below
    /// `tol` × max|f| or the grid reaches 2^[`MAX_GRID_LOG2`] intervals.
    pub fn build(
        f: &dyn Fn(f64) -> f64,
        df: &dyn Fn(f64) -> f64,
        lo: f64,
        hi: f64,
        tol: f64,
    ) -> Self {
        let mut log2 = 10;
        loop {
            let g = Self::at(f, df, lo, hi, 1 << log2);
            let scale = g
                .nodes
                .iter()
                .fold(0.0f64, |m, n| m.max(n[0].abs()))
                .max(1e-300);
            let mut err: f64 = 0.0;
            let h = 1.0 / g.inv_h;
            for i in 0..g.last {
                let x = lo + (i as f64 + 0.5) * h;
                err = err.max((g.eval(x) - f(x)).abs());
            }
            let rel = err / scale;
            if rel <= tol || log2 >= MAX_GRID_LOG2 {
                return Self {
                    rel_error: rel,
                    ..g
                };
            }
            log2 += 1;
        }
    }

    fn at(f: &dyn Fn(f64) -> f64, df: &dyn Fn(f64) -> f64, lo: f64, hi: f64, n: usize) -> Self {
        let h = (hi - lo) / n as f64;
        let nodes = (0..=n)
            .map(|i| {
                let x = if i == n { hi } else { lo + i as f64 * h };
                [f(x), df(x) * h]
            })
            .collect();
        Self {
            lo,
            inv_h: 1.0 / h,
            last: n - 1,
            nodes,
            rel_error: f64::NAN,
        }
    }

    /// The interpolant at x (clamped to the end intervals outside the range).
    #[inline(always)]
    pub fn eval(&self, x: f64) -> f64 {
        let t = (x - self.lo) * self.inv_h;
        let i = (t.max(0.0) as usize).min(self.last);
        let u = t - i as f64;
        let a = self.nodes[i];
        let b = self.nodes[i + 1];
        // Hermite basis in Horner form
        let u2 = u * u;
        let h00 = (2.0 * u - 3.0) * u2 + 1.0;
        let h10 = ((u - 2.0) * u + 1.0) * u;
        let h01 = (3.0 - 2.0 * u) * u2;
        let h11 = (u - 1.0) * u2;
        h00 * a[0] + h10 * a[1] + h01 * b[0] + h11 * b[1]
    }
}

/// −U' from a grid of U'.
#[derive(Debug, Clone)]
pub struct GridForce(pub Grid);

impl Force for GridForce {
    #[inline(always)]
    fn force(&self, x: f64) -> f64 {
        -self.0.eval(x)
    }
}

/// The force chosen for a potential.
#[derive(Debug, Clone)]
pub enum FastForce {
    /// closed form
    Family(Family),
    /// tabulated U'
    Grid(GridForce),
}

impl FastForce {
    /// Chooses the fast form of `pot`'s force on `[lo, hi]`.
    pub fn new(pot: &crate::scenario::AnyPotential) -> Self {
        match pot {
            crate::scenario::AnyPotential::Family(f) => Self::Family(*f),
            other => {
                let (lo, hi) = other.domain();
                Self::Grid(GridForce(Grid::build(
                    &|x| other.du(x),
                    &|x| other.d2u(x),
                    lo,
                    hi,
                    FORCE_TOL,
                )))
            }
        }
    }
    /// The relative interpolation error of the force (0 for closed forms).
    pub fn rel_error(&self) -> f64 {
        match self {
            Self::Family(_) => 0.0,
            Self::Grid(g) => g.0.rel_error,
        }
    }
}

/// D(x) and D'(x) for the overdamped inner loop.
pub trait Mobility: Sync + Send {
    /// (D(x), D'(x))
    fn d(&self, x: f64) -> (f64, f64);
    /// true when D is constant (the Itô drift vanishes)
    const CONSTANT: bool;
}

/// Constant D.
#[derive(Debug, Clone, Copy)]
pub struct ConstD(pub f64);

impl Mobility for ConstD {
    #[inline(always)]
    fn d(&self, _x: f64) -> (f64, f64) {
        (self.0, 0.0)
    }
    const CONSTANT: bool = true;
}

/// Tabulated D(x): Hermite for D (with exact D'), and D' from its own grid.
#[derive(Debug, Clone)]
pub struct GridD {
    d: Grid,
    dd: Grid,
}

impl GridD {
    /// Tabulates a position-dependent D on [lo, hi].
    pub fn new(diff: &Diffusion, lo: f64, hi: f64) -> Self {
        let h = 1e-6 * (hi - lo);
        // D'' for the Hermite table of D' by central differences of the exact D' (error ~h² D⁗)
        let d2 = |x: f64| (diff.derivative(x + h) - diff.derivative(x - h)) / (2.0 * h);
        Self {
            d: Grid::build(
                &|x| diff.value(x),
                &|x| diff.derivative(x),
                lo,
                hi,
                FORCE_TOL,
            ),
            dd: Grid::build(&|x| diff.derivative(x), &d2, lo, hi, 1e-5),
        }
    }
}

impl Mobility for GridD {
    #[inline(always)]
    fn d(&self, x: f64) -> (f64, f64) {
        (self.d.eval(x), self.dd.eval(x))
    }
    const CONSTANT: bool = false;
}

#[cfg(test)]
mod tests {
    use super::*;

    // Hermite interpolation of a smooth function converges as h⁴ (de Boor, ch. IV): the built grid
    // must meet its own tolerance, checked here at points other than the midpoints.
    #[test]
    fn grid_meets_its_tolerance() {
        let g = Grid::build(
            &|x: f64| (3.0 * x).sin() * x,
            &|x: f64| 3.0 * (3.0 * x).cos() * x + (3.0 * x).sin(),
            -2.0,
            2.0,
            1e-9,
        );
        assert!(g.rel_error <= 1e-9);
        for i in 0..1000 {
            let x = -2.0 + 4.0 * (f64::from(i) + 0.37) / 1000.0;
            assert!((g.eval(x) - (3.0 * x).sin() * x).abs() < 2e-9 * 2.0);
        }
    }
}
