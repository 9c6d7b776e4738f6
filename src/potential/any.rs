//! The one potential type the rest of the crate passes around: a formula, a built-in family, a
//! profile table, or one of these extended periodically.

use super::periodic::Periodic;
use super::{Family, FitSummary, FormulaPotential, Potential, Table};

/// The potential in internal units.
#[derive(Debug, Clone)]
pub enum AnyPotential {
    /// user formula
    Formula(FormulaPotential),
    /// built-in family
    Family(Family),
    /// profile table
    Table(Table),
    /// a formula or table extended periodically (potential.periodic)
    Periodic(Box<Periodic<AnyPotential>>),
}

macro_rules! dispatch {
    ($self:ident, $p:ident => $e:expr) => {
        match $self {
            AnyPotential::Formula($p) => $e,
            AnyPotential::Family($p) => $e,
            AnyPotential::Table($p) => $e,
            AnyPotential::Periodic($p) => $e,
        }
    };
}

impl Potential for AnyPotential {
    #[inline]
    fn u(&self, x: f64) -> f64 {
        dispatch!(self, p => p.u(x))
    }
    #[inline]
    fn du(&self, x: f64) -> f64 {
        dispatch!(self, p => p.du(x))
    }
    #[inline]
    fn d2u(&self, x: f64) -> f64 {
        dispatch!(self, p => p.d2u(x))
    }
    fn domain(&self) -> (f64, f64) {
        dispatch!(self, p => p.domain())
    }
    fn scan_points(&self) -> Vec<f64> {
        dispatch!(self, p => p.scan_points())
    }
    fn stationary_points(&self) -> Option<Vec<f64>> {
        dispatch!(self, p => p.stationary_points())
    }
    fn knots(&self) -> Option<&[f64]> {
        dispatch!(self, p => p.knots())
    }
    fn is_interpolated(&self) -> bool {
        dispatch!(self, p => p.is_interpolated())
    }
    fn prominence_threshold(&self, x: f64) -> f64 {
        dispatch!(self, p => p.prominence_threshold(x))
    }
    fn fit(&self) -> Option<&FitSummary> {
        dispatch!(self, p => p.fit())
    }
}
