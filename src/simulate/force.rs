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

/// −U' of the double well, E_b((x/a)² − 1)², with the constants folded (no division per step).
#[derive(Debug, Clone, Copy)]
pub struct DoubleWellForce {
    c: f64,
    inv_a2: f64,
}

impl Force for DoubleWellForce {
    #[inline(always)]
    fn force(&self, x: f64) -> f64 {
        -self.c * x * (x * x * self.inv_a2 - 1.0)
    }
}

/// −U' of the cubic well, (27/4)E_b(s² − s³) with s = x/L: −(13.5 E_b/L²) x + (20.25 E_b/L³) x².
#[derive(Debug, Clone, Copy)]
pub struct CubicForce {
    k1: f64,
    k2: f64,
}

impl Force for CubicForce {
    #[inline(always)]
    fn force(&self, x: f64) -> f64 {
        x * (self.k2 * x - self.k1)
    }
}

/// −U' of the washboard, −A cos(kx) − F x: F − A k sin(kx).
#[derive(Debug, Clone, Copy)]
pub struct WashboardForce {
    ak: f64,
    k: f64,
    tilt: f64,
}

impl Force for WashboardForce {
    #[inline(always)]
    fn force(&self, x: f64) -> f64 {
        self.tilt - self.ak * (self.k * x).sin()
    }
}

impl Force for Family {
    #[inline]
    fn force(&self, x: f64) -> f64 {
        -crate::potential::Potential::du(self, x)
    }
}

/// A uniform-grid cubic Hermite table of a function and its derivative, stored per interval as
/// power-basis coefficients in the local coordinate u ∈ [0, 1) (one Horner evaluation per call).
#[derive(Debug, Clone)]
pub struct Grid {
    lo: f64,
    inv_h: f64,
    last: i64,
    /// per interval: c0 + c1 u + c2 u² + c3 u³
    coef: Vec<[f64; 4]>,
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
        Self::build_scaled(f, df, lo, hi, tol, 1.0)
    }

    /// As [`Grid::build`], tabulating `scale · f` (e.g. −1 to store a force from U').
    pub fn build_scaled(
        f: &dyn Fn(f64) -> f64,
        df: &dyn Fn(f64) -> f64,
        lo: f64,
        hi: f64,
        tol: f64,
        scale: f64,
    ) -> Self {
        let mut log2 = 10;
        loop {
            let g = Self::at(f, df, lo, hi, 1 << log2, scale);
            let h = 1.0 / g.inv_h;
            let mut fmax: f64 = 1e-300;
            let mut err: f64 = 0.0;
            for i in 0..=g.last {
                let x0 = lo + i as f64 * h;
                fmax = fmax.max(f(x0).abs());
                let x = x0 + 0.5 * h;
                err = err.max((g.eval(x) - scale * f(x)).abs());
            }
            let rel = err / (fmax * scale.abs());
            if rel <= tol || log2 >= MAX_GRID_LOG2 {
                return Self {
                    rel_error: rel,
                    ..g
                };
            }
            log2 += 1;
        }
    }

    fn at(
        f: &dyn Fn(f64) -> f64,
        df: &dyn Fn(f64) -> f64,
        lo: f64,
        hi: f64,
        n: usize,
        scale: f64,
    ) -> Self {
        let h = (hi - lo) / n as f64;
        let node = |i: usize| {
            let x = if i == n { hi } else { lo + i as f64 * h };
            (scale * f(x), scale * df(x) * h)
        };
        let mut prev = node(0);
        let mut coef = Vec::with_capacity(n);
        for i in 0..n {
            let next = node(i + 1);
            let (p0, m0) = prev;
            let (p1, m1) = next;
            coef.push([
                p0,
                m0,
                3.0 * (p1 - p0) - 2.0 * m0 - m1,
                2.0 * (p0 - p1) + m0 + m1,
            ]);
            prev = next;
        }
        Self {
            lo,
            inv_h: 1.0 / h,
            last: n as i64 - 1,
            coef,
            rel_error: f64::NAN,
        }
    }

    /// The interpolant at x (the end intervals' cubics continue outside the range).
    #[inline(always)]
    pub fn eval(&self, x: f64) -> f64 {
        let t = (x - self.lo) * self.inv_h;
        // i64 conversions are single instructions; clamp keeps the index in range
        let i = (t as i64).clamp(0, self.last);
        let u = t - i as f64;
        let c = &self.coef[i as usize];
        c[0] + u * (c[1] + u * (c[2] + u * c[3]))
    }
}

/// −U' from a grid (stored with the sign folded in).
#[derive(Debug, Clone)]
pub struct GridForce(pub Grid);

impl Force for GridForce {
    #[inline(always)]
    fn force(&self, x: f64) -> f64 {
        self.0.eval(x)
    }
}

/// The force chosen for a potential.
#[derive(Debug, Clone)]
pub enum FastForce {
    /// closed-form double well
    DoubleWell(DoubleWellForce),
    /// closed-form cubic well
    Cubic(CubicForce),
    /// closed-form washboard
    Washboard(WashboardForce),
    /// tabulated U'
    Grid(GridForce),
}

impl FastForce {
    /// Chooses the fast form of `pot`'s force on `[lo, hi]`.
    pub fn new(pot: &crate::potential::AnyPotential) -> Self {
        match pot {
            crate::potential::AnyPotential::Family(Family::DoubleWell { eb, a, .. }) => {
                Self::DoubleWell(DoubleWellForce {
                    c: 4.0 * eb / (a * a),
                    inv_a2: 1.0 / (a * a),
                })
            }
            crate::potential::AnyPotential::Family(Family::Cubic { eb, l, .. }) => {
                Self::Cubic(CubicForce {
                    k1: 13.5 * eb / (l * l),
                    k2: 20.25 * eb / (l * l * l),
                })
            }
            crate::potential::AnyPotential::Family(Family::Washboard {
                amp, period, tilt, ..
            }) => {
                let k = 2.0 * PI / period;
                Self::Washboard(WashboardForce {
                    ak: amp * k,
                    k,
                    tilt: *tilt,
                })
            }
            other => {
                let (lo, hi) = other.domain();
                Self::Grid(GridForce(Grid::build_scaled(
                    &|x| other.du(x),
                    &|x| other.d2u(x),
                    lo,
                    hi,
                    FORCE_TOL,
                    -1.0,
                )))
            }
        }
    }
    /// The relative interpolation error of the force (0 for closed forms).
    pub fn rel_error(&self) -> f64 {
        match self {
            Self::Grid(g) => g.0.rel_error,
            _ => 0.0,
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

    // The folded closed forms equal the family's U' (rounding only).
    #[test]
    fn folded_forces_match_the_families() {
        use crate::potential::AnyPotential;
        let fams = [
            Family::DoubleWell {
                eb: 5.0,
                a: 1.3,
                domain: (-4.0, 4.0),
            },
            Family::Cubic {
                eb: 7.0,
                l: 0.8,
                domain: (-1.0, 3.0),
            },
            Family::Washboard {
                amp: 3.0,
                period: 2.0,
                tilt: 0.7,
                domain: (-2.0, 4.0),
            },
        ];
        for fam in fams {
            let ff = FastForce::new(&AnyPotential::Family(fam));
            for &x in &[-0.9, 0.1, 0.77, 1.6] {
                let want = -crate::potential::Potential::du(&fam, x);
                let got = match &ff {
                    FastForce::DoubleWell(f) => f.force(x),
                    FastForce::Cubic(f) => f.force(x),
                    FastForce::Washboard(f) => f.force(x),
                    FastForce::Grid(f) => f.force(x),
                };
                assert!((got - want).abs() < 1e-12 * (1.0 + want.abs()), "{fam:?}");
            }
        }
    }

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
