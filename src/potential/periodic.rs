//! The tilted-periodic extension of a potential known on one period (PHYSICS.md §7): x = x0 +
//! nL + r, 0 ≤ r < L → U(x) = U_in(x0 + r) − F n L, with the tilt F = −(U_in(x0 + L) −
//! U_in(x0))/L read off the profile. Drift, effective diffusion and hopping on it are in
//! `theory::periodic`.

use super::{Diffusion, FitSummary, Potential};
use thiserror::Error;

/// Allowed mismatch of U' across the period boundary, relative to the largest |V'| on the
/// period. A not-a-knot spline through a cosine tabulated with 30 rows per period misses the two
/// end slopes by 1.4e-3 of the force scale together (measured; the error falls as the cube of the
/// spacing), so 5e-3 accepts tables from about 25 rows per period and still flags a force jump of
/// 0.5%, which is a non-periodic profile.
pub const SLOPE_MISMATCH_REL: f64 = 5e-3;
/// Absolute floor of the slope check (kT/length) for a flat V, where the relative test is empty:
/// rounding in U' of an O(1) profile is ~1e-15.
pub const SLOPE_MISMATCH_ABS: f64 = 1e-9;
/// Relative size of a period's rise in U that is rounding, not tilt.
const ROUNDING_RISE: f64 = 1e-13;
/// Samples per period for the periodicity, finiteness and D checks.
pub const CHECK_SAMPLES: usize = 400;

/// Problems with the periodic extension; [`WrapError::key`] names the scenario key to look at.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum WrapError {
    /// The period is not a positive finite number.
    #[error("the period must be positive and finite (got {period})")]
    BadPeriod {
        /// the value given
        period: f64,
    },
    /// The base period is not inside the potential's domain.
    #[error("the base period [{x0}, {end}] is not inside the potential's domain [{lo}, {hi}]")]
    OutsideDomain {
        /// period start
        x0: f64,
        /// period end
        end: f64,
        /// domain start
        lo: f64,
        /// domain end
        hi: f64,
    },
    /// U or U' is NaN or infinite on the base period.
    #[error("{what} is not finite at x = {x} on the base period")]
    NotFinite {
        /// "U(x)" or "U'(x)"
        what: &'static str,
        /// where
        x: f64,
    },
    /// The force does not repeat: U'(x0) ≠ U'(x0 + L).
    #[error(
        "the profile is not periodic: U'({x0}) = {left} but U'({end}) = {right} (allowed mismatch {allowed:.3e} kT/length, 0.1% of the largest periodic force): check the period and the profile"
    )]
    NotPeriodic {
        /// period start
        x0: f64,
        /// period end
        end: f64,
        /// U'(x0)
        left: f64,
        /// U'(x0 + L)
        right: f64,
        /// the tolerance used
        allowed: f64,
    },
    /// The window is empty or not finite.
    #[error("the analysis window [{lo}, {hi}] is empty or not finite")]
    BadWindow {
        /// start
        lo: f64,
        /// end
        hi: f64,
    },
}

impl WrapError {
    /// The scenario key a user should look at.
    pub fn key(&self) -> &'static str {
        match self {
            Self::BadPeriod { .. } => "potential.period",
            Self::OutsideDomain { .. } | Self::BadWindow { .. } => "potential.domain",
            Self::NotFinite { .. } | Self::NotPeriodic { .. } => "potential",
        }
    }
}

/// The tilted-periodic extension of a potential known on one period `[x0, x0 + L]`.
#[derive(Debug, Clone)]
pub struct Periodic<P> {
    inner: P,
    x0: f64,
    period: f64,
    tilt: f64,
    window: (f64, f64),
}

impl<P: Potential> Periodic<P> {
    /// Wraps `inner` (read only on `[x0, x0 + period]`, which must lie in its domain). The window
    /// (the `domain()` the landscape analysis sees) is `[x0 − L, x0 + 2L]`.
    ///
    /// # Errors
    /// A bad period, a base period outside the domain, U or U' not finite on it, or a profile whose
    /// force does not repeat ([`SLOPE_MISMATCH_REL`]).
    pub fn new(inner: P, x0: f64, period: f64) -> Result<Self, WrapError> {
        if !(period.is_finite() && period > 0.0 && x0.is_finite()) {
            return Err(WrapError::BadPeriod { period });
        }
        let end = x0 + period;
        let (lo, hi) = inner.domain();
        // rounding slack: the period may be given as the domain's own width
        let slack = 1e-12 * period.max(x0.abs());
        if x0 < lo - slack || end > hi + slack {
            return Err(WrapError::OutsideDomain { x0, end, lo, hi });
        }
        let (u0, u1) = (inner.u(x0), inner.u(end));
        for (what, x, v) in [("U(x)", x0, u0), ("U(x)", end, u1)] {
            if !v.is_finite() {
                return Err(WrapError::NotFinite { what, x });
            }
        }
        // a rise at rounding level (cos(2π(x0 + L)) vs cos(2πx0)) is no tilt: F L < 1e-13 kT
        let rise = u1 - u0;
        let tilt = if rise.abs() <= ROUNDING_RISE * (1.0 + u0.abs() + u1.abs()) {
            0.0
        } else {
            -rise / period
        };
        let mut vmax: f64 = 0.0;
        for i in 0..=CHECK_SAMPLES {
            let x = x0 + period * i as f64 / CHECK_SAMPLES as f64;
            let (u, d) = (inner.u(x), inner.du(x));
            if !u.is_finite() {
                return Err(WrapError::NotFinite { what: "U(x)", x });
            }
            if !d.is_finite() {
                return Err(WrapError::NotFinite { what: "U'(x)", x });
            }
            vmax = vmax.max((d + tilt).abs());
        }
        let (left, right) = (inner.du(x0), inner.du(end));
        let allowed = SLOPE_MISMATCH_REL * vmax + SLOPE_MISMATCH_ABS;
        if (left - right).abs() > allowed {
            return Err(WrapError::NotPeriodic {
                x0,
                end,
                left,
                right,
                allowed,
            });
        }
        Ok(Self {
            inner,
            x0,
            period,
            tilt,
            window: (x0 - period, x0 + 2.0 * period),
        })
    }

    /// The same landscape seen through another window.
    ///
    /// # Errors
    /// An empty or non-finite window.
    pub fn with_window(mut self, lo: f64, hi: f64) -> Result<Self, WrapError> {
        if !(lo.is_finite() && hi.is_finite() && hi > lo) {
            return Err(WrapError::BadWindow { lo, hi });
        }
        self.window = (lo, hi);
        Ok(self)
    }

    /// The tilt F (kT/length): V = U + F x is periodic.
    pub fn tilt(&self) -> f64 {
        self.tilt
    }
    /// The period L.
    pub fn period(&self) -> f64 {
        self.period
    }
    /// The start x0 of the base period.
    pub fn origin(&self) -> f64 {
        self.x0
    }
    /// The wrapped potential.
    pub fn inner(&self) -> &P {
        &self.inner
    }

    /// x = x0 + nL + r with 0 ≤ r < L: returns (n, r).
    #[inline]
    pub fn reduce(&self, x: f64) -> (f64, f64) {
        let mut n = ((x - self.x0) / self.period).floor();
        let mut r = x - self.x0 - n * self.period;
        // rounding can leave r a hair outside [0, L)
        if r >= self.period {
            r -= self.period;
            n += 1.0;
        }
        if r < 0.0 {
            r += self.period;
            n -= 1.0;
            if r >= self.period {
                r = 0.0;
                n += 1.0;
            }
        }
        (n, r)
    }

    /// The periodic part V(x) = U(x) + F (x − x0) = U_in(x0 + r) + F r (no large cancelling terms).
    #[inline]
    pub fn untilted(&self, x: f64) -> f64 {
        let (_, r) = self.reduce(x);
        self.inner.u(self.x0 + r) + self.tilt * r
    }

    /// D at the position x0 + r of the base period that `x` maps to.
    #[inline]
    pub fn diffusion_at(&self, d: &Diffusion, x: f64) -> f64 {
        let (_, r) = self.reduce(x);
        d.value(self.x0 + r)
    }
}

impl<P: Potential> Potential for Periodic<P> {
    #[inline]
    fn u(&self, x: f64) -> f64 {
        let (n, r) = self.reduce(x);
        self.inner.u(self.x0 + r) - self.tilt * n * self.period
    }
    #[inline]
    fn du(&self, x: f64) -> f64 {
        let (_, r) = self.reduce(x);
        self.inner.du(self.x0 + r)
    }
    #[inline]
    fn d2u(&self, x: f64) -> f64 {
        let (_, r) = self.reduce(x);
        self.inner.d2u(self.x0 + r)
    }
    fn domain(&self) -> (f64, f64) {
        self.window
    }
    fn is_interpolated(&self) -> bool {
        self.inner.is_interpolated()
    }
    fn prominence_threshold(&self, x: f64) -> f64 {
        let (_, r) = self.reduce(x);
        self.inner.prominence_threshold(self.x0 + r)
    }
    fn fit(&self) -> Option<&FitSummary> {
        self.inner.fit()
    }
}

/// A borrowed potential, so a `&dyn Potential` can be wrapped.
#[derive(Debug, Clone, Copy)]
pub struct ByRef<'a>(pub &'a dyn Potential);

impl Potential for ByRef<'_> {
    fn u(&self, x: f64) -> f64 {
        self.0.u(x)
    }
    fn du(&self, x: f64) -> f64 {
        self.0.du(x)
    }
    fn d2u(&self, x: f64) -> f64 {
        self.0.d2u(x)
    }
    fn domain(&self) -> (f64, f64) {
        self.0.domain()
    }
    fn is_interpolated(&self) -> bool {
        self.0.is_interpolated()
    }
    fn prominence_threshold(&self, x: f64) -> f64 {
        self.0.prominence_threshold(x)
    }
    fn fit(&self) -> Option<&FitSummary> {
        self.0.fit()
    }
}
