//! The catalogue of rate formulas: one [`Formula`] per rate with its key, names, published
//! source, the function giving the rate from a [`RateContext`], its validity rule, its accuracy
//! against a simulated escape rate and whether it assumes memoryless friction.
//!
//! [`super::rates_for`] evaluates the entries in catalogue order, so a formula may use the
//! ln k of one listed before it (Kramers uses TST, the turnover uses Kramers, PGH uses Kramers or
//! Grote–Hynes' prefactor, the well-to-well rate uses Kramers). The reports, scans, plots, CSV
//! columns, comparisons and the uncertainty propagation iterate the same list, in the same order.
//! A new formula is its maths in a `theory` module, one [`RateKey`] line and one entry here, and
//! its test.

use super::mfpt::Mfpt;
use super::regime::{DELTA_ED_VALID, DELTA_SPATIAL, RegimeName};
use super::{PghReport, kramers, tst, turnover};
use crate::landscape::{LOW_BARRIER_KT, Landscape};
use crate::potential::{Diffusion, Potential};
use serde::{Deserialize, Serialize};

/// Declares [`RateKey`] and [`Rates`] from one list, so the two cannot drift apart. The list's
/// order is that of the JSON `rates` object.
macro_rules! rate_keys {
    ($($(#[doc = $doc:literal])* $variant:ident => $field:ident,)*) => {
        /// The key of a rate formula; serialises to its JSON key.
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
        #[serde(rename_all = "snake_case")]
        pub enum RateKey {
            $($(#[doc = $doc])* $variant,)*
        }

        impl RateKey {
            /// Every key, in the order of the JSON `rates` object.
            pub const ALL: [RateKey; [$(stringify!($field)),*].len()] = [$(RateKey::$variant),*];

            /// The JSON key.
            pub const fn as_str(self) -> &'static str {
                match self {
                    $(RateKey::$variant => stringify!($field),)*
                }
            }
        }

        /// The rates (per time unit), one per [`RateKey`]; `None` where a formula does not apply
        /// (no mass, or no friction). Read with [`Rates::get`] or `rates[key]`; the named fields
        /// serialise as the JSON `rates` object.
        #[derive(Debug, Clone, Copy, Default, Serialize)]
        pub struct Rates {
            $($(#[doc = $doc])* pub $field: Option<f64>,)*
        }

        impl Rates {
            /// The rate of `key`.
            pub fn get(&self, key: RateKey) -> Option<f64> {
                self[key]
            }
        }

        impl std::ops::Index<RateKey> for Rates {
            type Output = Option<f64>;
            fn index(&self, key: RateKey) -> &Option<f64> {
                match key {
                    $(RateKey::$variant => &self.$field,)*
                }
            }
        }

        impl std::ops::IndexMut<RateKey> for Rates {
            fn index_mut(&mut self, key: RateKey) -> &mut Option<f64> {
                match key {
                    $(RateKey::$variant => &mut self.$field,)*
                }
            }
        }
    };
}

rate_keys! {
    /// harmonic TST
    Tst => tst,
    /// exact 1-D TST (flux over population)
    TstExact => tst_exact,
    /// Kramers spatial-diffusion
    Kramers => kramers,
    /// Smoluchowski (overdamped) limit
    Smoluchowski => smoluchowski,
    /// energy-diffusion (escape from the well)
    EnergyDiffusion => energy_diffusion,
    /// Mel'nikov–Meshkov turnover (escape from the well)
    Turnover => turnover,
    /// 1 / exact overdamped MFPT
    Mfpt => mfpt,
    /// Grote–Hynes rate for memory friction (with particle.memory_time)
    GroteHynes => grote_hynes,
    /// Mel'nikov's well-to-well transition rate of a double well (not an escape rate)
    WellToWell => well_to_well,
    /// Pollak–Grabert–Hänggi turnover rate for Ohmic friction (escape from the well)
    Pgh => pgh,
}

impl std::fmt::Display for RateKey {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// What a formula's function gives: most give ln k (barriers of hundreds of kT), a few k itself
/// (kept as the product they have always been computed as, so the numbers stay bit for bit).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Value {
    /// ln k
    Ln(f64),
    /// k
    Rate(f64),
}

impl Value {
    /// k.
    pub fn rate(self) -> f64 {
        match self {
            Self::Ln(v) => v.exp(),
            Self::Rate(k) => k,
        }
    }

    /// ln k.
    pub fn ln(self) -> f64 {
        match self {
            Self::Ln(v) => v,
            Self::Rate(k) => k.ln(),
        }
    }
}

/// Everything a formula may read: the system, its landscape and regime, the exact MFPT, and the
/// formulas computed before it; a formula may add warnings and the PGH report.
pub struct RateContext<'a> {
    /// the potential (kT = 1)
    pub pot: &'a dyn Potential,
    /// D(x)
    pub diffusion: &'a Diffusion,
    /// the mass, if given
    pub mass: Option<f64>,
    /// the memory time of an exponential friction kernel, if given
    pub memory_time: Option<f64>,
    /// the analysed landscape
    pub landscape: &'a Landscape,
    /// the exact overdamped MFPT
    pub mfpt: &'a Mfpt,
    /// γ: as given, or from D at the barrier (Einstein relation)
    pub gamma: Option<f64>,
    /// D at the barrier top
    pub d_barrier: f64,
    /// δ = γ I_b / kT, when finite and positive
    pub delta: Option<f64>,
    /// δ₂ from the product-side orbit of a double well
    pub delta_product: Option<f64>,
    /// ln A(δ)
    pub ln_depopulation: Option<f64>,
    /// Kramers' transmission λ₊/ω_b
    pub transmission: Option<f64>,
    /// γ/ω_b
    pub gamma_over_omega_barrier: Option<f64>,
    /// the friction regime
    pub regime: RegimeName,
    /// the PGH energy loss, once PGH is computed
    pub pgh: Option<PghReport>,
    /// warnings so far
    pub warnings: Vec<String>,
    /// what the formulas before the current one gave
    values: [Option<Value>; RateKey::ALL.len()],
}

impl<'a> RateContext<'a> {
    /// A context with no formula computed yet; the derived fields (δ, γ, …) are set by the caller.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        pot: &'a dyn Potential,
        diffusion: &'a Diffusion,
        mass: Option<f64>,
        memory_time: Option<f64>,
        landscape: &'a Landscape,
        mfpt: &'a Mfpt,
        gamma: Option<f64>,
        d_barrier: f64,
    ) -> Self {
        Self {
            pot,
            diffusion,
            mass,
            memory_time,
            landscape,
            mfpt,
            gamma,
            d_barrier,
            delta: None,
            delta_product: None,
            ln_depopulation: None,
            transmission: None,
            gamma_over_omega_barrier: None,
            regime: RegimeName::Overdamped,
            pgh: None,
            warnings: Vec::new(),
            values: [None; RateKey::ALL.len()],
        }
    }

    /// ln k of a formula computed earlier (`None` if it does not apply, or is not computed yet).
    pub fn ln(&self, key: RateKey) -> Option<f64> {
        self.values[key as usize].map(Value::ln)
    }

    /// Records what a formula gave.
    pub fn set(&mut self, key: RateKey, v: Option<Value>) {
        self.values[key as usize] = v;
    }

    /// Whether the barrier is high enough for the asymptotic formulas.
    fn high(&self) -> bool {
        self.landscape.barrier_height >= LOW_BARRIER_KT
    }

    /// The validity of an asymptotic formula: unreliable below 5 kT, else `good` when `ok`.
    fn pick(&self, ok: bool, good: &'static str, bad: &'static str) -> Validity {
        if !self.high() {
            (false, LOW_NOTE)
        } else if ok {
            (true, good)
        } else {
            (false, bad)
        }
    }
}

const LOW_NOTE: &str = "barrier below 5 kT: asymptotic formula unreliable";

/// Whether a formula holds, and why (or what it is).
pub type Validity = (bool, &'static str);

/// The documented accuracy of a rate against a simulated escape rate (see
/// [`super::accuracy_band`] for the numbers and their reasons).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Band {
    /// exact up to the time-step bias
    Exact,
    /// an upper bound: no upper limit
    UpperBound,
    /// an asymptotic formula that overestimates by finite-barrier corrections of order kT/E_b
    Asymptotic,
    /// as `Asymptotic`, and may fall short by as much
    TwoSided,
}

impl Band {
    /// The allowed range of theory/simulation at a barrier of `barrier_kt`.
    pub fn limits(self, barrier_kt: f64) -> (f64, Option<f64>) {
        let finite = (1.0 / barrier_kt.max(1.0)).min(0.5);
        match self {
            Self::Exact => (1.0 / 1.01, Some(1.0 / 0.99)),
            Self::UpperBound => (1.0 / 1.03, None),
            Self::TwoSided => (1.0 / (1.03 + finite), Some(1.0 / (1.0 - finite))),
            Self::Asymptotic => (1.0 / 1.03, Some(1.0 / (1.0 - finite))),
        }
    }
}

/// What a holding formula is checked against when the exact overdamped 1/MFPT holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MfptCheck {
    /// not checked (1/MFPT itself, an upper bound, or another quantity)
    None,
    /// 1/MFPT as it is (an overdamped formula)
    Overdamped,
    /// 1/MFPT times Kramers' overdamped correction λ₊γ/ω_b² (a formula with inertia)
    Inertial,
}

/// Which simulated rate a formula is set against.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Measures {
    /// the first passage to the target
    Escape,
    /// transitions counted between the wells
    WellToWell,
}

/// One rate formula.
pub struct Formula {
    /// its key
    pub key: RateKey,
    /// its name in the rate table
    pub label: &'static str,
    /// its short name in scan tables
    pub heading: &'static str,
    /// its name in plot legends
    pub legend: &'static str,
    /// the published source
    pub source: &'static str,
    /// the rate, `None` where it does not apply
    pub rate: fn(&mut RateContext) -> Option<Value>,
    /// whether it holds here, when it applies
    pub holds: fn(&RateContext) -> Validity,
    /// the note when it does not apply and a mass is given
    pub absent: fn(&RateContext) -> &'static str,
    /// whether the rate table has a row for it when it does not apply
    pub row_when_absent: bool,
    /// its place in the rate table (its rows keep the order they have always had)
    pub row: u8,
    /// its documented accuracy against a simulated escape rate
    pub band: Band,
    /// the consistency check against 1/MFPT
    pub mfpt_check: MfptCheck,
    /// the simulated rate it is compared with
    pub measures: Measures,
    /// whether it assumes memoryless friction (not holding when a memory time is set)
    pub memoryless: bool,
    /// whether the uncertainty propagation splits var(ln k) into barrier and prefactor parts
    pub decompose: bool,
}

impl Formula {
    /// The entry of `key`.
    pub fn of(key: RateKey) -> &'static Formula {
        CATALOGUE
            .iter()
            .find(|f| f.key == key)
            .expect("every key has one entry (tested)")
    }
}

fn needs_friction(_: &RateContext) -> &'static str {
    "needs a friction"
}

/// Every rate formula, in report order (scan columns, plots, uncertainty), each after the
/// formulas it uses.
pub const CATALOGUE: &[Formula] = &[
    Formula {
        key: RateKey::Tst,
        label: "harmonic TST",
        heading: "TST",
        legend: "harmonic TST",
        source: "Eyring, J. Chem. Phys. 3, 107 (1935); Wigner, Trans. Faraday Soc. 34, 29 (1938)",
        rate: |c| {
            let eb = c.landscape.barrier_height;
            let w = c.landscape.omega_reactant?;
            Some(Value::Ln(tst::ln_harmonic(w, eb)))
        },
        holds: |_| (false, "upper bound: no recrossing, harmonic well"),
        absent: needs_friction,
        row_when_absent: true,
        row: 0,
        band: Band::UpperBound,
        mfpt_check: MfptCheck::None,
        measures: Measures::Escape,
        memoryless: false,
        decompose: false,
    },
    Formula {
        key: RateKey::TstExact,
        label: "exact 1-D TST",
        heading: "exact TST",
        legend: "exact 1-D TST",
        source: "Hänggi, Talkner & Borkovec, Rev. Mod. Phys. 62, 251 (1990), Sec. II",
        rate: |c| {
            let l = c.landscape;
            let extra = super::between(l, l.wall, l.barrier);
            let m = c.mass?;
            Some(Value::Ln(tst::ln_exact(
                c.pot, m, l.wall, l.barrier, &extra,
            )))
        },
        holds: |_| (false, "upper bound: no recrossing"),
        absent: needs_friction,
        row_when_absent: true,
        row: 1,
        band: Band::UpperBound,
        mfpt_check: MfptCheck::None,
        measures: Measures::Escape,
        memoryless: false,
        decompose: false,
    },
    Formula {
        key: RateKey::Kramers,
        label: "Kramers (spatial diffusion)",
        heading: "Kramers",
        legend: "Kramers",
        source: "Kramers, Physica 7, 284 (1940)",
        rate: |c| {
            let k = c.ln(RateKey::Tst)?;
            Some(Value::Ln(k + c.transmission?.ln()))
        },
        holds: |c| {
            let over = c.regime == RegimeName::Overdamped;
            let ok = c.delta.is_some_and(|d| d >= DELTA_SPATIAL) || (over && c.delta.is_none());
            c.pick(
                ok,
                "holds: strong enough friction (delta >= 10)",
                "needs delta >= 10 (energy supply limits the rate here)",
            )
        },
        absent: needs_friction,
        row_when_absent: true,
        row: 2,
        band: Band::Asymptotic,
        mfpt_check: MfptCheck::Inertial,
        measures: Measures::Escape,
        memoryless: true,
        decompose: true,
    },
    Formula {
        key: RateKey::Smoluchowski,
        label: "Smoluchowski limit",
        heading: "Smoluchowski",
        legend: "Smoluchowski",
        source: "Kramers, Physica 7, 284 (1940); Hänggi, Talkner & Borkovec, Rev. Mod. Phys. 62, 251 (1990), Sec. IV",
        rate: |c| {
            let l = c.landscape;
            Some(Value::Ln(kramers::ln_smoluchowski(
                c.d_barrier,
                l.curvature_reactant,
                l.curvature_barrier,
                l.barrier_height,
            )))
        },
        holds: |c| {
            c.pick(
                c.regime == RegimeName::Overdamped,
                if c.gamma_over_omega_barrier.is_some() {
                    "holds: overdamped (gamma/omega_b >= 5)"
                } else {
                    "holds: overdamped input (D only)"
                },
                "needs gamma/omega_b >= 5",
            )
        },
        absent: needs_friction,
        row_when_absent: true,
        row: 3,
        band: Band::Asymptotic,
        mfpt_check: MfptCheck::Overdamped,
        measures: Measures::Escape,
        memoryless: true,
        decompose: false,
    },
    Formula {
        key: RateKey::EnergyDiffusion,
        label: "energy diffusion (escape)",
        heading: "energy diffusion",
        legend: "energy diffusion",
        source: "Kramers, Physica 7, 284 (1940); Hänggi, Talkner & Borkovec, Rev. Mod. Phys. 62, 251 (1990), Sec. IV",
        rate: |c| Some(Value::Ln(c.ln(RateKey::Tst)? + c.delta?.ln())),
        holds: |c| {
            c.pick(
                c.delta.is_some_and(|d| d < DELTA_ED_VALID),
                "holds: weak friction (delta < 0.02)",
                "needs delta < 0.02 (within ~12% of the turnover rate)",
            )
        },
        absent: needs_friction,
        row_when_absent: true,
        row: 4,
        band: Band::Asymptotic,
        mfpt_check: MfptCheck::Inertial,
        measures: Measures::Escape,
        memoryless: true,
        decompose: false,
    },
    Formula {
        key: RateKey::Turnover,
        label: "Mel'nikov-Meshkov (escape)",
        heading: "turnover",
        legend: "Mel'nikov-Meshkov",
        source: "Mel'nikov & Meshkov, J. Chem. Phys. 85, 1018 (1986); Mel'nikov, Phys. Rep. 209, 1 (1991)",
        rate: |c| Some(Value::Ln(c.ln(RateKey::Kramers)? + c.ln_depopulation?)),
        holds: |c| {
            c.pick(
                true,
                "holds at all frictions (finite-barrier error ~10% at weak friction)",
                "",
            )
        },
        absent: needs_friction,
        row_when_absent: true,
        row: 5,
        band: Band::Asymptotic,
        mfpt_check: MfptCheck::Inertial,
        measures: Measures::Escape,
        memoryless: true,
        decompose: false,
    },
    Formula {
        key: RateKey::Pgh,
        label: "Pollak-Grabert-Hanggi (escape)",
        heading: "PGH",
        legend: "Pollak-Grabert-Hanggi",
        source: "Pollak, Grabert & Hänggi, J. Chem. Phys. 91, 4073 (1989)",
        rate: |c| {
            // the energy loss along the unstable normal mode replaces γ I_b; its prefactor rate
            // (λ‡/ω_b) k_TST is Kramers', or Grote–Hynes' with memory
            let l = c.landscape;
            let prefactor = match (c.memory_time, c.gamma, l.omega_barrier, c.ln(RateKey::Tst)) {
                (Some(tau), Some(g), Some(wb), Some(k)) => {
                    Some(k + (kramers::lambda_grote_hynes(g, wb, tau) / wb).ln())
                }
                _ => c.ln(RateKey::Kramers),
            };
            let (m, g, k) = (c.mass?, c.gamma?, prefactor?);
            let (report, ln_k) =
                super::pgh_rate(c.pot, m, g, c.memory_time, l, k, &mut c.warnings)?;
            c.pgh = Some(report);
            Some(Value::Ln(ln_k))
        },
        holds: |c| {
            let note = if c.memory_time.is_some() {
                "holds at all frictions, exponential memory (finite-barrier error ~kT/E_b)"
            } else {
                "holds at all frictions, Ohmic (finite-barrier error ~kT/E_b)"
            };
            c.pick(true, note, "")
        },
        absent: |c| {
            if c.gamma.is_some() && c.ln(RateKey::Kramers).is_some() {
                "the unstable mode's orbit could not be followed (see the warnings)"
            } else {
                "needs a friction"
            }
        },
        row_when_absent: true,
        row: 6,
        band: Band::TwoSided,
        mfpt_check: MfptCheck::Inertial,
        measures: Measures::Escape,
        memoryless: false,
        decompose: false,
    },
    Formula {
        key: RateKey::Mfpt,
        label: "1/MFPT (exact overdamped)",
        heading: "1/MFPT",
        legend: "1/MFPT (overdamped)",
        source: "Pontryagin, Andronov & Vitt (1933); Szabo, Schulten & Schulten, J. Chem. Phys. 72, 4350 (1980)",
        rate: |c| Some(Value::Ln(-c.mfpt.ln_time)),
        holds: |c| {
            if c.regime == RegimeName::Overdamped {
                (true, "exact for overdamped dynamics, any barrier")
            } else {
                (
                    false,
                    "exact for the overdamped model only; inertia matters here",
                )
            }
        },
        absent: needs_friction,
        row_when_absent: true,
        row: 8,
        band: Band::Exact,
        mfpt_check: MfptCheck::None,
        measures: Measures::Escape,
        memoryless: true,
        decompose: true,
    },
    Formula {
        key: RateKey::GroteHynes,
        label: "Grote-Hynes (memory friction)",
        heading: "Grote-Hynes",
        legend: "Grote-Hynes",
        source: "Grote & Hynes, J. Chem. Phys. 73, 2715 (1980)",
        rate: |c| {
            // k_GH = (λ_r/ω_b) k_TST for an exponential memory kernel
            let (tau, g) = (c.memory_time?, c.gamma?);
            let (wb, tst) = (c.landscape.omega_barrier?, c.ln(RateKey::Tst)?.exp());
            Some(Value::Rate(
                kramers::lambda_grote_hynes(g, wb, tau) / wb * tst,
            ))
        },
        holds: |c| {
            if c.high() {
                (
                    c.delta.is_none_or(|d| d >= DELTA_SPATIAL),
                    "memory friction, spatial-diffusion regime (delta >= 10)",
                )
            } else {
                (false, LOW_NOTE)
            }
        },
        absent: needs_friction,
        row_when_absent: false,
        row: 9,
        band: Band::Asymptotic,
        mfpt_check: MfptCheck::Inertial,
        measures: Measures::Escape,
        memoryless: false,
        decompose: false,
    },
    Formula {
        key: RateKey::WellToWell,
        label: "well-to-well (Mel'nikov)",
        heading: "well to well",
        legend: "well-to-well",
        source: "Mel'nikov, Phys. Rep. 209, 1 (1991)",
        rate: |c| {
            let (k, d1, d2) = (c.ln(RateKey::Kramers)?, c.delta?, c.delta_product?);
            Some(Value::Ln(k + turnover::ln_well_to_well(d1, d2)))
        },
        holds: |c| {
            c.pick(
                true,
                "transitions between the wells (Mel'nikov 1991), not the first escape",
                "",
            )
        },
        absent: |c| {
            if c.landscape.product.is_none() {
                "no product well (a metastable well has only an escape rate)"
            } else {
                "needs a friction"
            }
        },
        row_when_absent: true,
        row: 7,
        band: Band::Asymptotic,
        mfpt_check: MfptCheck::None,
        measures: Measures::WellToWell,
        memoryless: true,
        decompose: false,
    },
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_key_has_exactly_one_entry() {
        for k in RateKey::ALL {
            assert_eq!(CATALOGUE.iter().filter(|f| f.key == k).count(), 1, "{k}");
        }
        assert_eq!(CATALOGUE.len(), RateKey::ALL.len());
        // the rate table's places are a permutation
        let mut rows: Vec<u8> = CATALOGUE.iter().map(|f| f.row).collect();
        rows.sort_unstable();
        assert!(rows.iter().enumerate().all(|(i, r)| usize::from(*r) == i));
    }

    #[test]
    fn serde_names_round_trip() {
        for f in CATALOGUE {
            let s = serde_json::to_string(&f.key).unwrap();
            assert_eq!(s, format!("\"{}\"", f.key.as_str()));
            let back: RateKey = serde_json::from_str(&s).unwrap();
            assert_eq!(back, f.key);
        }
        // the named fields of Rates serialise under the same keys, in RateKey::ALL order
        let mut r = Rates::default();
        for (i, k) in RateKey::ALL.into_iter().enumerate() {
            r[k] = Some(i as f64);
        }
        let v = serde_json::to_value(r).unwrap();
        for (i, k) in RateKey::ALL.into_iter().enumerate() {
            assert_eq!(v[k.as_str()], serde_json::json!(i as f64), "{k}");
        }
        let text = serde_json::to_string(&r).unwrap();
        let pos: Vec<usize> = RateKey::ALL
            .iter()
            .map(|k| text.find(&format!("\"{k}\"")).unwrap())
            .collect();
        assert!(pos.windows(2).all(|w| w[0] < w[1]), "{text}");
    }

    #[test]
    fn names_are_distinct() {
        for pick in [
            |f: &Formula| f.label,
            |f: &Formula| f.heading,
            |f: &Formula| f.legend,
        ] {
            let mut v: Vec<&str> = CATALOGUE.iter().map(pick).collect();
            v.sort_unstable();
            v.dedup();
            assert_eq!(v.len(), CATALOGUE.len());
        }
    }
}
