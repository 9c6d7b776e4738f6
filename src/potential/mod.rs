//! Potentials U(x) in internal units (energies in kT, lengths in the scenario's length unit), all
//! behind one trait that gives U, U' and U''.
//!
//! Implementations: [`FormulaPotential`] (a user formula with exact symbolic derivatives),
//! [`Family`] (closed forms: double well, cubic metastable well, tilted washboard) and [`Table`]
//! (a profile file interpolated by a not-a-knot cubic spline). Every potential lives on a finite
//! domain with reflecting walls at its ends; `wall_*` give the steep walls the simulation meets
//! outside it.

pub mod any;
pub mod family;
pub mod formula;
pub mod grid;
pub mod periodic;
pub mod smooth;
pub mod surface;
pub mod table;

pub use any::AnyPotential;
pub use family::Family;
pub use formula::{Formula, Formula2, FormulaError};
pub use grid::{GridError, GridSurface};
pub use surface::{FormulaSurface, Surface};
pub use table::{FitChoice, FitSummary, Spline, Table, TableError, TableOptions};

/// A one-dimensional potential on a finite domain `[lo, hi]` with reflecting ends.
pub trait Potential: Send + Sync + std::fmt::Debug {
    /// U(x) in kT.
    fn u(&self, x: f64) -> f64;
    /// U'(x) in kT per length.
    fn du(&self, x: f64) -> f64;
    /// U''(x) in kT per length squared.
    fn d2u(&self, x: f64) -> f64;
    /// The domain (reflecting walls at both ends).
    fn domain(&self) -> (f64, f64);
    /// Points at which the scan for stationary points looks for sign changes of U'.
    /// The default is 20 000 uniform intervals: a well or barrier narrower than about three of them
    /// (0.015% of the domain) could hide a pair of stationary points between two samples.
    fn scan_points(&self) -> Vec<f64> {
        let (lo, hi) = self.domain();
        let n = 20_000;
        (0..=n)
            .map(|i| lo + (hi - lo) * (i as f64) / (n as f64))
            .collect()
    }
    /// The stationary points, when the potential can give them exactly (a spline: roots of its
    /// piecewise-quadratic U'); `None` lets the landscape scan U' for sign changes.
    fn stationary_points(&self) -> Option<Vec<f64>> {
        None
    }
    /// Points where U is only C² (spline knots); quadrature panels may align with them.
    fn knots(&self) -> Option<&[f64]> {
        None
    }
    /// True if the curvatures come from interpolated data (and so are sensitive to noise).
    fn is_interpolated(&self) -> bool {
        false
    }
    /// The energy difference (kT) below which a neighbouring minimum–maximum pair near x is taken
    /// for noise and dropped from the landscape; zero (keep every stationary point) for exact
    /// potentials.
    fn prominence_threshold(&self, _x: f64) -> f64 {
        0.0
    }
    /// How a table's rows became the curve; None for closed forms and formulas.
    fn fit(&self) -> Option<&FitSummary> {
        None
    }
}

/// A user formula, scaled from the scenario's energy unit to kT.
#[derive(Debug, Clone)]
pub struct FormulaPotential {
    formula: Formula,
    scale: f64,
    domain: (f64, f64),
}

impl FormulaPotential {
    /// `scale` multiplies the formula's value to give kT (1 / kT-in-energy-unit).
    pub fn new(formula: Formula, scale: f64, domain: (f64, f64)) -> Self {
        Self {
            formula,
            scale,
            domain,
        }
    }
    /// The formula as written.
    pub fn formula(&self) -> &Formula {
        &self.formula
    }
}

impl Potential for FormulaPotential {
    #[inline]
    fn u(&self, x: f64) -> f64 {
        self.scale * self.formula.value(x)
    }
    #[inline]
    fn du(&self, x: f64) -> f64 {
        self.scale * self.formula.d1(x)
    }
    #[inline]
    fn d2u(&self, x: f64) -> f64 {
        self.scale * self.formula.d2(x)
    }
    fn domain(&self) -> (f64, f64) {
        self.domain
    }
}

/// x folded into [x0, x0 + period).
#[inline]
fn fold(x: f64, x0: f64, period: f64) -> f64 {
    x0 + (x - x0).rem_euclid(period)
}

/// Position-dependent (or constant) diffusion coefficient D(x), in length²/time.
#[derive(Debug, Clone)]
pub enum Diffusion {
    /// constant D
    Constant(f64),
    /// D(x) from a formula
    Formula(Formula),
    /// D(x) from a table column, spline-interpolated
    Table(Spline),
    /// D(x) of a periodic landscape: `inner` read on [x0, x0 + period) and repeated
    Periodic {
        /// D on the base period
        inner: Box<Diffusion>,
        /// start of the base period
        x0: f64,
        /// the period
        period: f64,
    },
}

impl Diffusion {
    /// D(x)
    #[inline]
    pub fn value(&self, x: f64) -> f64 {
        match self {
            Self::Constant(d) => *d,
            Self::Formula(f) => f.value(x),
            Self::Table(s) => s.value(x),
            Self::Periodic { inner, x0, period } => inner.value(fold(x, *x0, *period)),
        }
    }
    /// D'(x) (the Itô drift term of overdamped dynamics)
    #[inline]
    pub fn derivative(&self, x: f64) -> f64 {
        match self {
            Self::Constant(_) => 0.0,
            Self::Formula(f) => f.d1(x),
            Self::Table(s) => s.d1(x),
            Self::Periodic { inner, x0, period } => inner.derivative(fold(x, *x0, *period)),
        }
    }
    /// The constant value, if D does not depend on x.
    pub fn constant(&self) -> Option<f64> {
        match self {
            Self::Constant(d) => Some(*d),
            _ => None,
        }
    }
}
