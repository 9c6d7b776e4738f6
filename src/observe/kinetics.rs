//! Observed kinetics between two core sets A and B (position intervals).
//!
//! Transition-based assignment (core-set Markov models; Buchete & Hummer, J. Phys. Chem. B 112,
//! 6057 (2008)): each sample interval belongs to the core visited last; a transition A → B is
//! counted when the trajectory, last in A, enters B (and B → A likewise), so excursions that
//! return to the same core count nothing. The rate k_AB = n_AB / T_A, T_A the time assigned to A,
//! is the maximum-likelihood rate of a Poisson process; its 95% interval is the exact
//! chi-square (Garwood) interval for n events in exposure T ([`crate::stats::poisson_interval`]),
//! so the sample size is the number of transitions, whatever the sampling rate. For a Markovian
//! crossing between cores, 1/k_AB is the mean first-passage time from the edge of A to the edge
//! of B (Hummer, J. Chem. Phys. 120, 516 (2004), for rates from transition counting).
//!
//! Dwell times: the durations of complete periods (entered from the other core, left to it); the
//! first period of each trajectory (left-truncated) and the last (censored) are not dwell times
//! but do count in T. Exponentiality: the coefficient of variation (1 for an exponential) and the
//! Kolmogorov–Smirnov distance to the exponential of the same mean ([`crate::stats`]).
//!
//! Automatic cores: around the deepest bin of U and the deepest other local minimum (lowest U
//! among bins no higher than their two neighbours on each side) lying at least
//! [`MIN_SEPARATION_KT`] below the highest observed bin between the two, after subtracting twice
//! their combined σ_U (so that a noisy, sparsely visited tail bin is no minimum); each core is the run of contiguous bins around its minimum
//! within [`CORE_DEPTH_KT`] of it (it cannot cross the barrier, which is higher). A is the core at
//! smaller x. Boundary dependence: the rates are recomputed with both cores grown and shrunk at
//! each edge by [`BOUNDARY_FRACTION`] of the gap between them (shrinking by at most a quarter of
//! a core's width).

use super::free_energy::FreeEnergy;
use super::{ObserveError, Sink};
use crate::stats::{ks_distance, ks_p_value, poisson_interval};
use serde::{Deserialize, Serialize};

/// Automatic cores reach this far (kT) above their minimum.
pub const CORE_DEPTH_KT: f64 = 1.0;
/// The second minimum must lie this far (kT) below the barrier to the deepest one.
pub const MIN_SEPARATION_KT: f64 = 2.0;
/// Cores are shrunk and grown by this fraction of the gap between them.
pub const BOUNDARY_FRACTION: f64 = 0.1;
/// Fewer transitions than this draw a warning (a 95% interval wider than about ±60%).
pub const MIN_TRANSITIONS: u64 = 10;
/// A KS p-value below this draws a warning about non-exponential dwell times.
pub const KS_WARN_P: f64 = 0.01;
/// A relative spread of the rate over the core variants above this draws a warning.
pub const SPREAD_WARN: f64 = 0.2;

/// A closed interval of positions.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Interval {
    /// lower end
    pub lo: f64,
    /// upper end
    pub hi: f64,
}

impl Interval {
    #[inline(always)]
    fn contains(self, x: f64) -> bool {
        self.lo <= x && x <= self.hi
    }
    fn width(self) -> f64 {
        self.hi - self.lo
    }
}

/// Checks given cores: finite, ordered, disjoint.
///
/// # Errors
/// An option error naming the fault.
pub fn check_cores(c: [Interval; 2]) -> Result<[Interval; 2], ObserveError> {
    let err = |message: String| ObserveError::Option {
        option: "cores",
        message,
    };
    for (name, i) in ["A", "B"].iter().zip(c) {
        if !(i.lo.is_finite() && i.hi.is_finite() && i.lo < i.hi) {
            return Err(err(format!(
                "core {name} [{}, {}] must have finite ends, lower first",
                i.lo, i.hi
            )));
        }
    }
    if gap(c) <= 0.0 {
        return Err(err(format!(
            "cores A [{}, {}] and B [{}, {}] overlap",
            c[0].lo, c[0].hi, c[1].lo, c[1].hi
        )));
    }
    Ok(c)
}

/// Distance between the two cores (≤ 0 when they overlap).
fn gap(c: [Interval; 2]) -> f64 {
    (c[1].lo - c[0].hi).max(c[0].lo - c[1].hi)
}

/// Cores around the two deepest separated minima of U (see the module comment).
///
/// # Errors
/// No second minimum separated by [`MIN_SEPARATION_KT`].
pub fn auto_cores(fe: &FreeEnergy) -> Result<[Interval; 2], ObserveError> {
    let b = &fe.bins;
    let h = fe.bin_width;
    let err = |message: String| ObserveError::Option {
        option: "cores",
        message,
    };
    if b.len() < 3 {
        return Err(err(format!(
            "{} non-empty bins: too few to find two minima; give the cores",
            b.len()
        )));
    }
    // an empty bin between two others is an unobserved (infinitely high) region
    let joined = |i: usize| b[i + 1].x - b[i].x < 1.5 * h;
    let g = (0..b.len())
        .min_by(|&i, &j| b[i].u.total_cmp(&b[j].u))
        .expect("bins checked above");
    let sigma = |i: usize| b[i].sigma_u.unwrap_or(0.0);
    // depth of minimum j below the highest observed bin between it and g, less 2 combined σ_U
    // (an unobserved gap is no evidence of a barrier)
    let depth = |j: usize| {
        let (l, r) = (g.min(j), g.max(j));
        let top = (l..=r)
            .max_by(|&p, &q| b[p].u.total_cmp(&b[q].u))
            .expect("non-empty range");
        b[top].u - b[j].u - 2.0 * sigma(top).hypot(sigma(j))
    };
    let local_min =
        |j: usize| (j.saturating_sub(2)..=(j + 2).min(b.len() - 1)).all(|k| b[j].u <= b[k].u);
    let second = (0..b.len())
        .filter(|&j| j != g && local_min(j) && depth(j) >= MIN_SEPARATION_KT)
        .min_by(|&i, &j| b[i].u.total_cmp(&b[j].u))
        .ok_or_else(|| {
            err(format!(
                "no second free-energy minimum lies {MIN_SEPARATION_KT} kT below the barrier to the deepest one (x = {}): give the cores",
                b[g].x
            ))
        })?;
    let core = |m: usize| {
        let top = b[m].u + CORE_DEPTH_KT;
        let mut l = m;
        while l > 0 && joined(l - 1) && b[l - 1].u <= top {
            l -= 1;
        }
        let mut r = m;
        while r + 1 < b.len() && joined(r) && b[r + 1].u <= top {
            r += 1;
        }
        Interval {
            lo: b[l].x - 0.5 * h,
            hi: b[r].x + 0.5 * h,
        }
    };
    let (first, other) = (core(g), core(second));
    Ok(if first.lo < other.lo {
        [first, other]
    } else {
        [other, first]
    })
}

/// The nominal, shrunk and grown cores (see the module comment).
pub fn variants(c: [Interval; 2]) -> [[Interval; 2]; 3] {
    let d = BOUNDARY_FRACTION * gap(c);
    let shrink = |i: Interval| {
        let s = d.min(0.25 * i.width());
        Interval {
            lo: i.lo + s,
            hi: i.hi - s,
        }
    };
    let grow = |i: Interval| Interval {
        lo: i.lo - d,
        hi: i.hi + d,
    };
    [c, c.map(shrink), c.map(grow)]
}

/// The streamed transition counter of one pair of cores.
#[derive(Debug, Clone)]
pub struct Counter {
    cores: [Interval; 2],
    /// last core visited in this trajectory: 0 none, 1 A, 2 B
    last: u8,
    /// a previous sample exists in this trajectory
    started: bool,
    /// the current period was entered from the other core
    entered: bool,
    period: u64,
    steps: [u64; 2],
    dwell_steps: [Vec<u64>; 2],
    /// n_AB, n_BA
    pub transitions: [u64; 2],
    exposure: [f64; 2],
    dwell: [Vec<f64>; 2],
}

impl Counter {
    /// A counter for cores [A, B].
    pub fn new(cores: [Interval; 2]) -> Self {
        Self {
            cores,
            last: 0,
            started: false,
            entered: false,
            period: 0,
            steps: [0; 2],
            dwell_steps: [Vec::new(), Vec::new()],
            transitions: [0; 2],
            exposure: [0.0; 2],
            dwell: [Vec::new(), Vec::new()],
        }
    }

    /// Time assigned to A and to B.
    pub fn exposure(&self) -> [f64; 2] {
        self.exposure
    }

    /// Complete dwell times in A and in B.
    pub fn dwell(&self) -> &[Vec<f64>; 2] {
        &self.dwell
    }
}

impl Sink for Counter {
    fn feed(&mut self, xs: &[f64]) {
        let [a, b] = self.cores;
        for &x in xs {
            // the interval ending at this sample belongs to the core visited last before it
            if self.started && self.last != 0 {
                self.steps[usize::from(self.last - 1)] += 1;
                self.period += 1;
            }
            self.started = true;
            let s = if a.contains(x) {
                1
            } else if b.contains(x) {
                2
            } else {
                0
            };
            if s != 0 && s != self.last {
                if self.last != 0 {
                    let from = usize::from(self.last - 1);
                    self.transitions[from] += 1;
                    if self.entered {
                        self.dwell_steps[from].push(self.period);
                    }
                    self.entered = true;
                } else {
                    self.entered = false;
                }
                self.last = s;
                self.period = 0;
            }
        }
    }

    fn end(&mut self, dt: f64) {
        for k in 0..2 {
            self.exposure[k] += self.steps[k] as f64 * dt;
            self.dwell[k].extend(self.dwell_steps[k].drain(..).map(|s| s as f64 * dt));
            self.steps[k] = 0;
        }
        self.last = 0;
        self.started = false;
        self.entered = false;
        self.period = 0;
    }
}

/// A rate from n transitions in exposure T.
#[derive(Debug, Clone, Serialize)]
pub struct Rate {
    /// transitions counted
    pub transitions: u64,
    /// time assigned to the core they leave
    pub exposure: f64,
    /// n / T; null without a transition
    pub rate: Option<f64>,
    /// exact Poisson 95% interval; null without a transition
    pub ci95: Option<[f64; 2]>,
    /// the 95% interval's upper end when no transition was seen (k is below it)
    pub upper95: Option<f64>,
}

impl Rate {
    fn new(n: u64, t: f64) -> Self {
        let (rate, ci95, upper95) = if t <= 0.0 {
            (None, None, None)
        } else if n == 0 {
            (None, None, Some(poisson_interval(0, t)[1]))
        } else {
            (Some(n as f64 / t), Some(poisson_interval(n, t)), None)
        };
        Self {
            transitions: n,
            exposure: t,
            rate,
            ci95,
            upper95,
        }
    }
}

/// Dwell-time statistics of one core.
#[derive(Debug, Clone, Serialize)]
pub struct Dwell {
    /// complete periods
    pub count: usize,
    /// mean dwell time
    pub mean: Option<f64>,
    /// coefficient of variation (1 for an exponential)
    pub cv: Option<f64>,
    /// KS distance to the exponential of the same mean
    pub ks_distance: Option<f64>,
    /// its p-value (conservative: the mean is fitted from the same data)
    pub ks_p_value: Option<f64>,
}

impl Dwell {
    fn new(times: &[f64]) -> Self {
        let n = times.len();
        let mut d = Self {
            count: n,
            mean: None,
            cv: None,
            ks_distance: None,
            ks_p_value: None,
        };
        if n == 0 {
            return d;
        }
        let mean = times.iter().sum::<f64>() / n as f64;
        d.mean = Some(mean);
        if n < 2 || mean <= 0.0 {
            return d;
        }
        let var = times.iter().map(|t| (t - mean) * (t - mean)).sum::<f64>() / (n - 1) as f64;
        d.cv = Some(var.sqrt() / mean);
        let mut sorted = times.to_vec();
        sorted.sort_by(f64::total_cmp);
        let ks = ks_distance(n, |i| -(-sorted[i] / mean).exp_m1());
        d.ks_distance = Some(ks);
        d.ks_p_value = Some(ks_p_value(ks, n as u64));
        d
    }
}

/// The rates with the cores shrunk and grown.
#[derive(Debug, Clone, Serialize)]
pub struct BoundaryDependence {
    /// how far each core edge moved (length)
    pub shift: f64,
    /// k_AB with the cores as they are, shrunk, grown
    pub forward: [Option<f64>; 3],
    /// k_BA likewise
    pub backward: [Option<f64>; 3],
    /// (max − min)/nominal of k_AB over the three
    pub forward_spread: Option<f64>,
    /// likewise for k_BA
    pub backward_spread: Option<f64>,
}

fn spread(k: [Option<f64>; 3]) -> Option<f64> {
    let [Some(a), Some(b), Some(c)] = k else {
        return None;
    };
    Some((a.max(b).max(c) - a.min(b).min(c)) / a)
}

/// Core-to-core kinetics.
#[derive(Debug, Clone, Serialize)]
pub struct Kinetics {
    /// core A
    pub core_a: Interval,
    /// core B
    pub core_b: Interval,
    /// how the cores were chosen
    pub core_rule: String,
    /// A → B
    pub forward: Rate,
    /// B → A
    pub backward: Rate,
    /// dwell times in A
    pub dwell_a: Dwell,
    /// dwell times in B
    pub dwell_b: Dwell,
    /// rates with the cores shrunk and grown
    pub boundary: BoundaryDependence,
    /// what the user should know
    pub warnings: Vec<String>,
}

impl Kinetics {
    /// Assembles the report from the nominal, shrunk and grown counters (in that order, as
    /// [`variants`] gives them).
    pub fn new(counters: &[Counter], given: bool) -> Self {
        let c = &counters[0];
        let [core_a, core_b] = c.cores;
        let forward = Rate::new(c.transitions[0], c.exposure[0]);
        let backward = Rate::new(c.transitions[1], c.exposure[1]);
        let dwell_a = Dwell::new(&c.dwell[0]);
        let dwell_b = Dwell::new(&c.dwell[1]);
        let rates = |k: usize| -> [Option<f64>; 3] {
            std::array::from_fn(|v| {
                Rate::new(counters[v].transitions[k], counters[v].exposure[k]).rate
            })
        };
        let boundary = BoundaryDependence {
            shift: BOUNDARY_FRACTION * gap(c.cores),
            forward: rates(0),
            backward: rates(1),
            forward_spread: spread(rates(0)),
            backward_spread: spread(rates(1)),
        };
        let mut warnings = Vec::new();
        for (dir, r) in [("A → B", &forward), ("B → A", &backward)] {
            let from = &dir[..1];
            if r.exposure <= 0.0 {
                warnings.push(format!("core {from} was never visited: no {dir} rate"));
            } else if r.transitions == 0 {
                warnings.push(format!(
                    "no {dir} transition observed: no rate, only the 95% upper bound k < {:.4e} per time unit; observe longer",
                    r.upper95.unwrap_or(f64::NAN)
                ));
            } else if r.transitions < MIN_TRANSITIONS {
                warnings.push(format!(
                    "only {} {dir} transition(s): the rate is rough (see its interval)",
                    r.transitions
                ));
            }
        }
        for (core, d) in [("A", &dwell_a), ("B", &dwell_b)] {
            if let Some(p) = d.ks_p_value.filter(|&p| p < KS_WARN_P) {
                warnings.push(format!(
                    "dwell times in {core} are not exponential (KS p = {p:.2e}, CV = {:.2}): the cores may not be Markovian states or the data not at equilibrium",
                    d.cv.unwrap_or(f64::NAN)
                ));
            }
        }
        for (dir, s) in [
            ("A → B", boundary.forward_spread),
            ("B → A", boundary.backward_spread),
        ] {
            if let Some(s) = s.filter(|&s| s > SPREAD_WARN) {
                warnings.push(format!(
                    "the {dir} rate changes by {:.0}% when the cores move by {:.3e}: the result depends on where the cores are drawn",
                    100.0 * s,
                    boundary.shift
                ));
            }
        }
        let core_rule = if given {
            "given".to_string()
        } else {
            format!(
                "automatic: bins within {CORE_DEPTH_KT} kT of the two deepest minima of U separated by at least {MIN_SEPARATION_KT} kT; A at smaller x"
            )
        };
        Self {
            core_a,
            core_b,
            core_rule,
            forward,
            backward,
            dwell_a,
            dwell_b,
            boundary,
            warnings,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(xs: &[f64]) -> Counter {
        let mut c = Counter::new([
            Interval { lo: -2.0, hi: -1.0 },
            Interval { lo: 1.0, hi: 2.0 },
        ]);
        c.feed(xs);
        c.end(0.5);
        c
    }

    // A hand-counted sequence: start between the cores (unassigned), A at sample 1, an excursion
    // that returns to A (no transition), B at sample 5, back to A at sample 8.
    #[test]
    fn transition_based_assignment() {
        let c = run(&[0.0, -1.5, 0.0, -1.2, 0.5, 1.5, 0.0, 0.2, -1.5, -1.4]);
        assert_eq!(c.transitions, [1, 1]);
        // A: intervals 1→2 .. 4→5 (4) and 8→9 (1); B: intervals 5→6 .. 7→8 (3); dt = 0.5
        assert_eq!(c.exposure(), [2.5, 1.5]);
        // the A period from sample 1 is left-truncated; the B period (5 → 8) is complete
        assert_eq!(c.dwell()[0], Vec::<f64>::new());
        assert_eq!(c.dwell()[1], vec![1.5]);
    }

    #[test]
    fn no_transition_gives_no_rate() {
        let r = Rate::new(0, 100.0);
        assert!(r.rate.is_none() && r.ci95.is_none());
        // Garwood upper limit for n = 0: χ²_2(0.975)/2 = −ln(0.025) = 3.689 events
        assert!((r.upper95.unwrap() * 100.0 - 3.688_879).abs() < 1e-5);
    }
}
