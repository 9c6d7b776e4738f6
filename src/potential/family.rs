//! Closed-form potential families (energies in kT, lengths in the scenario's unit).
//!
//! - double well: U = E_b ((x/a)² − 1)², minima at ±a, barrier E_b at 0.
//! - cubic metastable well: U = (27/4) E_b (s² − s³), s = x/L; minimum at 0, barrier E_b at 2L/3.
//!   Scenarios give `width` = 2L/3, the barrier position. Closed forms: ω_a = ω_b = sqrt(27 E_b/(2 m L²)),
//!   I_b = 36 E_b/(5 ω_a).
//! - tilted washboard: U = −A cos(2πx/L) − F x; untilted barrier 2A, minima at multiples of L.

use super::Potential;
use std::f64::consts::PI;

/// One of the built-in families.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Family {
    /// U = eb ((x/a)^2 - 1)^2
    DoubleWell {
        /// barrier height (kT)
        eb: f64,
        /// half the distance between the minima
        a: f64,
        /// domain
        domain: (f64, f64),
    },
    /// U = (27/4) eb (s^2 - s^3), s = x / l
    Cubic {
        /// barrier height (kT)
        eb: f64,
        /// length scale L; the barrier sits at 2L/3 (the scenario's `width`)
        l: f64,
        /// domain
        domain: (f64, f64),
    },
    /// U = -amp cos(2 pi x / period) - tilt x
    Washboard {
        /// amplitude (kT); the untilted barrier is 2 amp
        amp: f64,
        /// period
        period: f64,
        /// tilt force (kT per length)
        tilt: f64,
        /// domain
        domain: (f64, f64),
    },
}

impl Potential for Family {
    #[inline]
    fn u(&self, x: f64) -> f64 {
        match *self {
            Self::DoubleWell { eb, a, .. } => {
                let s = x / a;
                let w = s * s - 1.0;
                eb * w * w
            }
            Self::Cubic { eb, l, .. } => {
                let s = x / l;
                6.75 * eb * s * s * (1.0 - s)
            }
            Self::Washboard {
                amp, period, tilt, ..
            } => -amp * (2.0 * PI * x / period).cos() - tilt * x,
        }
    }
    #[inline]
    fn du(&self, x: f64) -> f64 {
        match *self {
            Self::DoubleWell { eb, a, .. } => {
                let s = x / a;
                4.0 * eb * s * (s * s - 1.0) / a
            }
            Self::Cubic { eb, l, .. } => {
                let s = x / l;
                6.75 * eb * s * (2.0 - 3.0 * s) / l
            }
            Self::Washboard {
                amp, period, tilt, ..
            } => {
                let k = 2.0 * PI / period;
                amp * k * (k * x).sin() - tilt
            }
        }
    }
    #[inline]
    fn d2u(&self, x: f64) -> f64 {
        match *self {
            Self::DoubleWell { eb, a, .. } => {
                let s = x / a;
                4.0 * eb * (3.0 * s * s - 1.0) / (a * a)
            }
            Self::Cubic { eb, l, .. } => {
                let s = x / l;
                6.75 * eb * (2.0 - 6.0 * s) / (l * l)
            }
            Self::Washboard { amp, period, .. } => {
                let k = 2.0 * PI / period;
                amp * k * k * (k * x).cos()
            }
        }
    }
    fn domain(&self) -> (f64, f64) {
        match *self {
            Self::DoubleWell { domain, .. }
            | Self::Cubic { domain, .. }
            | Self::Washboard { domain, .. } => domain,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Derivatives against central differences (common practice, no source): step 1e-5 gives a
    // truncation error ~1e-10 relative to these O(10) values, rounding ~1e-11.
    #[test]
    fn derivatives_match_finite_differences() {
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
        let h = 1e-5;
        for f in fams {
            for &x in &[-0.77, 0.1, 0.5, 1.9] {
                let d1 = (f.u(x + h) - f.u(x - h)) / (2.0 * h);
                let d2 = (f.du(x + h) - f.du(x - h)) / (2.0 * h);
                assert!((f.du(x) - d1).abs() < 1e-7 * (1.0 + d1.abs()), "{f:?}");
                assert!((f.d2u(x) - d2).abs() < 1e-7 * (1.0 + d2.abs()), "{f:?}");
            }
        }
    }
}
