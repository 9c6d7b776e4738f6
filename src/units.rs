//! Units: the names a scenario may use, the CODATA 2018 constants, and the one conversion into the
//! reduced system used everywhere inside the library.
//!
//! Internal system: energy in kT (kT = 1), length in the scenario's length unit, time in the scenario's
//! time unit. Mass is then expressed in kT·t_u²/L_u², so `m_int = m·M_u·L_u²/(t_u²·k_B·T)`. Friction
//! (a rate) and diffusion coefficients (L_u²/t_u) need no conversion, and rates come out per the
//! scenario's time unit. A fully reduced scenario (lengths, times and masses "1") is a consistent
//! reduced system whose time unit is L·sqrt(M/E_u) with E_u the energy unit, so `m_int = m·E_u/kT`;
//! with `energy = "kT"` that is `m_int = m`.
//!
//! Constants: CODATA 2018 recommended values (Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)).
//! k_B, N_A and e are exact in the 2019 SI; the atomic mass constant is measured.
//!
//! Quantities typed with a unit ("0.2 um^2/s", "35 kJ/mol", see [`read_quantity`]) are converted
//! into the scenario's units by exact rational arithmetic on the decimal constants above and
//! rounded once, so the result is the double nearest the exact value: the number the user would
//! have typed in the scenario's units.

use serde::Serialize;
use thiserror::Error;

/// Boltzmann constant, J/K (CODATA 2018, exact).
pub const K_B: f64 = 1.380_649e-23;
/// Avogadro constant, 1/mol (CODATA 2018, exact).
pub const N_A: f64 = 6.022_140_76e23;
/// Elementary charge, C (CODATA 2018, exact): 1 eV = E_CHARGE J.
pub const E_CHARGE: f64 = 1.602_176_634e-19;
/// Atomic mass constant (1 u), kg (CODATA 2018).
pub const AMU: f64 = 1.660_539_066_60e-27;
/// Thermochemical calorie, J (exact by definition).
pub const CALORIE: f64 = 4.184;

/// Errors in the `[units]` section.
#[derive(Debug, Error, PartialEq)]
#[non_exhaustive]
pub enum UnitError {
    /// A unit name that is not one of the allowed names.
    #[error("unknown {kind} unit {name:?} (allowed: {allowed})")]
    Unknown {
        /// which quantity
        kind: &'static str,
        /// what was given
        name: String,
        /// the allowed names
        allowed: &'static str,
    },
    /// Physical units without a temperature.
    #[error("units.temperature is required when {why}")]
    NeedTemperature {
        /// why it is needed
        why: &'static str,
    },
    /// Temperature not positive or not finite.
    #[error("units.temperature must be a positive number of kelvin, got {0}")]
    BadTemperature(f64),
    /// A quantity string that is not a number followed by a unit.
    #[error(
        "cannot read {text:?} as a quantity: {why} (write a number and a unit, e.g. \"1.5 nm\")"
    )]
    Syntax {
        /// the string as given
        text: String,
        /// what is wrong
        why: String,
    },
    /// A unit name that is not in the table of accepted units.
    #[error("unknown unit {unit:?} in {text:?}{hint}")]
    UnknownUnit {
        /// the string as given
        text: String,
        /// the unknown name
        unit: String,
        /// a suggestion (starts with ": ")
        hint: &'static str,
    },
    /// A unit of another dimension than the key holds.
    #[error("expected {expected}, found {found} in {text:?}")]
    Dimension {
        /// the string as given
        text: String,
        /// what the key holds
        expected: &'static str,
        /// what the string holds
        found: String,
    },
    /// A physical unit for a quantity the scenario keeps in reduced units.
    #[error(
        "{text:?} has a physical unit, but units.{base} is \"1\" (reduced): give a plain number in the scenario's units, or set units.{base}"
    )]
    Reduced {
        /// the string as given
        text: String,
        /// the reduced base unit ("length", "time", "mass")
        base: &'static str,
    },
    /// kT on one side of a conversion only, without a temperature.
    #[error(
        "{text:?} needs units.temperature: converting between kT and other energy units uses kT = k_B·T"
    )]
    KtWithoutTemperature {
        /// the string as given
        text: String,
    },
    /// A quantity that is not finite in the scenario's units.
    #[error("{text:?} is not a finite number in the scenario's units")]
    NotFinite {
        /// the string as given
        text: String,
    },
    /// Mixed reduced and physical mechanical units.
    #[error(
        "units: length, time and mass must be all reduced (\"1\") or all physical when a mass is given (got length = \"{length}\", time = \"{time}\", mass = \"{mass}\")"
    )]
    Mixed {
        /// length unit name
        length: String,
        /// time unit name
        time: String,
        /// mass unit name
        mass: String,
    },
}

/// Allowed energy unit names.
pub const ENERGY_NAMES: &str = "kT, kJ/mol, kcal/mol, eV, zJ";
/// Allowed length unit names.
pub const LENGTH_NAMES: &str = "1, nm, angstrom, um, m";
/// Allowed time unit names.
pub const TIME_NAMES: &str = "1, fs, ps, ns, us, ms, s";
/// Allowed mass unit names.
pub const MASS_NAMES: &str = "1, amu, kg";

/// Joules per unit of energy; `None` for kT (which depends on temperature).
pub fn energy_joule(name: &str) -> Result<Option<f64>, UnitError> {
    Ok(match name {
        "kT" => None,
        "kJ/mol" => Some(1e3 / N_A),
        "kcal/mol" => Some(CALORIE * 1e3 / N_A),
        "eV" => Some(E_CHARGE),
        "zJ" => Some(1e-21),
        _ => return Err(unknown("energy", name, ENERGY_NAMES)),
    })
}

/// Metres per unit of length; `None` for reduced.
pub fn length_metre(name: &str) -> Result<Option<f64>, UnitError> {
    Ok(match name {
        "1" => None,
        "nm" => Some(1e-9),
        "angstrom" => Some(1e-10),
        "um" => Some(1e-6),
        "m" => Some(1.0),
        _ => return Err(unknown("length", name, LENGTH_NAMES)),
    })
}

/// Seconds per unit of time; `None` for reduced.
pub fn time_second(name: &str) -> Result<Option<f64>, UnitError> {
    Ok(match name {
        "1" => None,
        "fs" => Some(1e-15),
        "ps" => Some(1e-12),
        "ns" => Some(1e-9),
        "us" => Some(1e-6),
        "ms" => Some(1e-3),
        "s" => Some(1.0),
        _ => return Err(unknown("time", name, TIME_NAMES)),
    })
}

/// Kilograms per unit of mass; `None` for reduced.
pub fn mass_kg(name: &str) -> Result<Option<f64>, UnitError> {
    Ok(match name {
        "1" => None,
        "amu" => Some(AMU),
        "kg" => Some(1.0),
        _ => return Err(unknown("mass", name, MASS_NAMES)),
    })
}

fn unknown(kind: &'static str, name: &str, allowed: &'static str) -> UnitError {
    UnitError::Unknown {
        kind,
        name: name.to_string(),
        allowed,
    }
}

/// The scenario's unit names, as given.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitNames {
    /// energy unit
    pub energy: String,
    /// length unit ("1" = reduced)
    pub length: String,
    /// time unit ("1" = reduced)
    pub time: String,
    /// mass unit ("1" = reduced)
    pub mass: String,
}

impl Default for UnitNames {
    fn default() -> Self {
        Self {
            energy: "kT".into(),
            length: "1".into(),
            time: "1".into(),
            mass: "1".into(),
        }
    }
}

/// The conversion between the scenario's units and the internal reduced system (kT = 1).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitSystem {
    /// the names as given
    pub names: UnitNames,
    /// temperature in K, if given
    pub temperature: Option<f64>,
    /// kT expressed in the scenario's energy unit (1 when energy = "kT")
    pub kt_in_energy_unit: f64,
    /// factor taking a mass in the scenario's mass unit to internal units
    pub mass_factor: Option<f64>,
}

impl UnitSystem {
    /// Builds the conversion.
    ///
    /// `needs_mass` says whether a mass will be converted; mixed reduced/physical mechanical units are
    /// only an error then (an overdamped scenario given only D never converts a mass).
    ///
    /// # Errors
    /// Unknown unit names, a missing or non-positive temperature where one is needed, mixed units.
    pub fn new(
        names: UnitNames,
        temperature: Option<f64>,
        needs_mass: bool,
    ) -> Result<Self, UnitError> {
        let e_j = energy_joule(&names.energy)?;
        let l_m = length_metre(&names.length)?;
        let t_s = time_second(&names.time)?;
        let m_kg = mass_kg(&names.mass)?;
        if let Some(t) = temperature
            && !(t.is_finite() && t > 0.0)
        {
            return Err(UnitError::BadTemperature(t));
        }
        let kt_joule = temperature.map(|t| K_B * t);
        let kt_in_energy_unit = match e_j {
            None => 1.0,
            Some(e) => match kt_joule {
                Some(kt) => kt / e,
                None => {
                    return Err(UnitError::NeedTemperature {
                        why: "the energy unit is not kT",
                    });
                }
            },
        };
        let mass_factor = if needs_mass {
            match (l_m, t_s, m_kg) {
                (None, None, None) => Some(1.0 / kt_in_energy_unit),
                (Some(l), Some(t), Some(m)) => match kt_joule {
                    Some(kt) => Some(m * l * l / (t * t * kt)),
                    None => {
                        return Err(UnitError::NeedTemperature {
                            why: "mass, length and time are physical units",
                        });
                    }
                },
                _ => {
                    return Err(UnitError::Mixed {
                        length: names.length.clone(),
                        time: names.time.clone(),
                        mass: names.mass.clone(),
                    });
                }
            }
        } else {
            None
        };
        Ok(Self {
            names,
            temperature,
            kt_in_energy_unit,
            mass_factor,
        })
    }

    /// The fully reduced system (kT = 1, every unit "1").
    pub fn reduced() -> Self {
        Self {
            names: UnitNames::default(),
            temperature: None,
            kt_in_energy_unit: 1.0,
            mass_factor: Some(1.0),
        }
    }

    /// Scenario energy -> kT.
    pub fn energy_to_kt(&self, e: f64) -> f64 {
        e / self.kt_in_energy_unit
    }

    /// kT -> scenario energy.
    pub fn energy_from_kt(&self, e: f64) -> f64 {
        e * self.kt_in_energy_unit
    }

    /// Scenario mass -> internal mass; `None` if no mass conversion was set up.
    pub fn mass_to_internal(&self, m: f64) -> Option<f64> {
        self.mass_factor.map(|f| m * f)
    }

    /// Action (energy·time) in kT·t_u -> scenario energy·time.
    pub fn action_from_internal(&self, a: f64) -> f64 {
        a * self.kt_in_energy_unit
    }
}

// ---------------------------------------------------------------------------------------------
// Quantities typed with a unit
// ---------------------------------------------------------------------------------------------

/// The constants above as exact decimals m·10^e (the f64 constants are their nearest doubles).
const K_B_EXACT: Exact = Exact::dec(1_380_649, -29);
const N_A_EXACT: Exact = Exact::dec(602_214_076, 15);
const E_CHARGE_EXACT: Exact = Exact::dec(1_602_176_634, -28);
const AMU_EXACT: Exact = Exact::dec(166_053_906_660, -38);
const CALORIE_EXACT: Exact = Exact::dec(4184, -3);

/// An exact positive rational num/den·10^exp (num = 0 is zero).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Exact {
    num: u128,
    den: u128,
    exp: i32,
}

fn gcd(mut a: u128, mut b: u128) -> u128 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

impl Exact {
    const ONE: Exact = Exact::dec(1, 0);

    const fn dec(m: u128, exp: i32) -> Self {
        Self {
            num: m,
            den: 1,
            exp,
        }
    }

    /// `None` on overflow (the caller then falls back to floating point).
    fn mul(self, o: Self) -> Option<Self> {
        let g1 = gcd(self.num, o.den).max(1);
        let g2 = gcd(o.num, self.den).max(1);
        Some(Self {
            num: (self.num / g1).checked_mul(o.num / g2)?,
            den: (self.den / g2).checked_mul(o.den / g1)?,
            exp: self.exp.checked_add(o.exp)?,
        })
    }

    fn recip(self) -> Self {
        Self {
            num: self.den,
            den: self.num,
            exp: -self.exp,
        }
    }

    /// The double nearest the exact value: the quotient's decimal digits (up to 800 significant
    /// ones, more than the 767 that any halfway point between two doubles has) and a sticky
    /// digit for a nonzero remainder go to the correctly rounding decimal parser.
    fn to_f64(self) -> Option<f64> {
        if self.num == 0 {
            return Some(0.0);
        }
        if self.den > u128::MAX / 10 {
            return None;
        }
        let q = self.num / self.den;
        let mut r = self.num % self.den;
        let mut digits = if q > 0 { q.to_string() } else { String::new() };
        let mut significant = digits.len();
        let mut exp = i64::from(self.exp);
        while r != 0 && significant < 800 {
            r *= 10;
            let d = r / self.den;
            r %= self.den;
            if d > 0 || significant > 0 {
                significant += 1;
            }
            digits.push(char::from(b'0' + d as u8));
            exp -= 1;
        }
        if r != 0 {
            digits.push('1');
            exp -= 1;
        }
        format!("{digits}e{exp}").parse().ok()
    }
}

/// A conversion factor: exact when it fits the exact arithmetic, else a double.
#[derive(Debug, Clone, Copy)]
struct Factor {
    exact: Option<Exact>,
    approx: f64,
}

impl Factor {
    const ONE: Factor = Factor::from_exact(Exact::ONE, 1.0);

    const fn from_exact(exact: Exact, approx: f64) -> Self {
        Self {
            exact: Some(exact),
            approx,
        }
    }

    fn exact(e: Exact) -> Self {
        let approx = (e.num as f64 / e.den as f64) * 10f64.powi(e.exp);
        Self {
            exact: Some(e),
            approx,
        }
    }

    fn mul(self, o: Self) -> Self {
        Self {
            exact: self.exact.zip(o.exact).and_then(|(a, b)| a.mul(b)),
            approx: self.approx * o.approx,
        }
    }

    fn recip(self) -> Self {
        Self {
            exact: self.exact.map(Exact::recip),
            approx: 1.0 / self.approx,
        }
    }

    fn powi(self, k: i32) -> Self {
        let base = if k < 0 { self.recip() } else { self };
        (0..k.unsigned_abs()).fold(Self::ONE, |acc, _| acc.mul(base))
    }

    fn value(self) -> f64 {
        self.exact.and_then(Exact::to_f64).unwrap_or(self.approx)
    }

    /// A decimal number as written ("-1.5e3" -> sign and 15·10^2); the double when it has more
    /// digits than the exact arithmetic holds.
    fn decimal(text: &str) -> Option<(bool, Self)> {
        let approx: f64 = text.parse().ok()?;
        let (neg, t) = match text.as_bytes().first() {
            Some(b'-') => (true, &text[1..]),
            Some(b'+') => (false, &text[1..]),
            _ => (false, text),
        };
        let (mant, exp) = t.split_once(['e', 'E']).unwrap_or((t, "0"));
        let (int, frac) = mant.split_once('.').unwrap_or((mant, ""));
        let digits = format!("{int}{frac}");
        let digits = digits.trim_start_matches('0');
        let trimmed = digits.trim_end_matches('0');
        let exact = exp.parse::<i32>().ok().and_then(|e| {
            let shift = i32::try_from(digits.len() - trimmed.len()).ok()?;
            let e = e
                .checked_sub(i32::try_from(frac.len()).ok()?)?
                .checked_add(shift)?;
            let m = if trimmed.is_empty() {
                0
            } else if trimmed.len() > 36 {
                return None;
            } else {
                trimmed.parse::<u128>().ok()?
            };
            Some(Exact::dec(m, e))
        });
        Some((
            neg,
            Self {
                exact,
                approx: approx.abs(),
            },
        ))
    }
}

/// Exponents of (kg, m, s, K).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Dim([i32; 4]);

impl Dim {
    const NONE: Dim = Dim([0, 0, 0, 0]);
    const MASS: Dim = Dim([1, 0, 0, 0]);
    const LENGTH: Dim = Dim([0, 1, 0, 0]);
    const TIME: Dim = Dim([0, 0, 1, 0]);
    const TEMPERATURE: Dim = Dim([0, 0, 0, 1]);
    const ENERGY: Dim = Dim([1, 2, -2, 0]);
    const FORCE: Dim = Dim([1, 1, -2, 0]);
    const PRESSURE: Dim = Dim([1, -1, -2, 0]);
    const VISCOSITY: Dim = Dim([1, -1, -1, 0]);

    fn add(self, o: Dim, k: i32) -> Dim {
        let mut d = self.0;
        for (a, b) in d.iter_mut().zip(o.0) {
            *a += k * b;
        }
        Dim(d)
    }

    /// "a length", "a rate", ... or the SI exponents.
    fn name(self) -> String {
        let named = [(Dim::NONE, "a pure number"), (Dim::PRESSURE, "a pressure")];
        if let Some(k) = Kind::ALL.iter().find(|k| k.dim() == self) {
            return k.short().to_string();
        }
        if let Some((_, n)) = named.iter().find(|(d, _)| *d == self) {
            return (*n).to_string();
        }
        let parts: Vec<String> = ["kg", "m", "s", "K"]
            .iter()
            .zip(self.0)
            .filter(|(_, p)| *p != 0)
            .map(|(u, p)| {
                if p == 1 {
                    (*u).to_string()
                } else {
                    format!("{u}^{p}")
                }
            })
            .collect();
        format!("a quantity in {}", parts.join(" "))
    }
}

/// The dimension a scenario key holds, and so the scenario unit its value is converted into.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum Kind {
    /// units.energy
    Energy,
    /// units.length
    Length,
    /// units.time
    Time,
    /// 1/units.time
    Rate,
    /// units.length²/units.time
    Diffusion,
    /// units.mass
    Mass,
    /// units.energy/units.length
    Force,
    /// units.energy·units.time/units.length³
    Viscosity,
    /// kelvin
    Temperature,
}

impl Kind {
    const ALL: [Kind; 9] = [
        Kind::Energy,
        Kind::Length,
        Kind::Time,
        Kind::Rate,
        Kind::Diffusion,
        Kind::Mass,
        Kind::Force,
        Kind::Viscosity,
        Kind::Temperature,
    ];

    fn dim(self) -> Dim {
        match self {
            Kind::Energy => Dim::ENERGY,
            Kind::Length => Dim::LENGTH,
            Kind::Time => Dim::TIME,
            Kind::Rate => Dim::TIME.add(Dim::TIME, -2),
            Kind::Diffusion => Dim::LENGTH.add(Dim::LENGTH, 1).add(Dim::TIME, -1),
            Kind::Mass => Dim::MASS,
            Kind::Force => Dim::FORCE,
            Kind::Viscosity => Dim::VISCOSITY,
            Kind::Temperature => Dim::TEMPERATURE,
        }
    }

    fn short(self) -> &'static str {
        match self {
            Kind::Energy => "an energy",
            Kind::Length => "a length",
            Kind::Time => "a time",
            Kind::Rate => "a rate",
            Kind::Diffusion => "a diffusion coefficient",
            Kind::Mass => "a mass",
            Kind::Force => "a force",
            Kind::Viscosity => "a viscosity",
            Kind::Temperature => "a temperature",
        }
    }

    /// What the key holds, with an example, for messages.
    pub fn expected(self) -> &'static str {
        match self {
            Kind::Energy => "an energy (e.g. \"35 kJ/mol\", \"3 kT\")",
            Kind::Length => "a length (e.g. \"1.5 nm\")",
            Kind::Time => "a time (e.g. \"2 fs\")",
            Kind::Rate => "a rate, 1/time (e.g. \"5 /ps\")",
            Kind::Diffusion => "a diffusion coefficient, length^2/time (e.g. \"0.2 um^2/s\")",
            Kind::Mass => "a mass (e.g. \"12 Da\")",
            Kind::Force => "a force, energy/length (e.g. \"2 pN\", \"1 kT/nm\")",
            Kind::Viscosity => "a viscosity (e.g. \"0.89 mPa s\")",
            Kind::Temperature => "a temperature (e.g. \"300 K\")",
        }
    }

    /// Powers of the scenario's (energy, length, time, mass) units.
    fn powers(self) -> [i32; 4] {
        match self {
            Kind::Energy => [1, 0, 0, 0],
            Kind::Length => [0, 1, 0, 0],
            Kind::Time => [0, 0, 1, 0],
            Kind::Rate => [0, 0, -1, 0],
            Kind::Diffusion => [0, 2, -1, 0],
            Kind::Mass => [0, 0, 0, 1],
            Kind::Force => [1, -1, 0, 0],
            Kind::Viscosity => [1, -3, 1, 0],
            Kind::Temperature => [0, 0, 0, 0],
        }
    }
}

/// A unit: a factor to SI, a power of kT (its factor needs the temperature) and the SI dimension
/// of everything but the kT part.
#[derive(Debug, Clone, Copy)]
struct Unit {
    factor: Factor,
    kt: i32,
    dim: Dim,
}

impl Unit {
    const ONE: Unit = Unit {
        factor: Factor::ONE,
        kt: 0,
        dim: Dim::NONE,
    };

    fn mul(self, o: Unit) -> Unit {
        Unit {
            factor: self.factor.mul(o.factor),
            kt: self.kt + o.kt,
            dim: self.dim.add(o.dim, 1),
        }
    }

    fn powi(self, k: i32) -> Unit {
        Unit {
            factor: self.factor.powi(k),
            kt: self.kt * k,
            dim: Dim::NONE.add(self.dim, k),
        }
    }

    /// The SI dimension, kT counted as an energy.
    fn full_dim(self) -> Dim {
        self.dim.add(Dim::ENERGY, self.kt)
    }
}

/// The accepted unit names (see the README's Units section). Every scenario unit name in
/// `[units]` is one of them.
fn atom(name: &str) -> Option<Unit> {
    let si = |m: u128, e: i32, dim: Dim| Unit {
        factor: Factor::exact(Exact::dec(m, e)),
        kt: 0,
        dim,
    };
    let times = |c: Exact, m: u128, e: i32, dim: Dim| Unit {
        factor: Factor::exact(c).mul(Factor::exact(Exact::dec(m, e))),
        kt: 0,
        dim,
    };
    let per_mol = |c: Exact, m: u128, e: i32| Unit {
        factor: Factor::exact(c)
            .mul(Factor::exact(Exact::dec(m, e)))
            .mul(Factor::exact(N_A_EXACT).recip()),
        kt: 0,
        dim: Dim::ENERGY,
    };
    let (l, t, en) = (Dim::LENGTH, Dim::TIME, Dim::ENERGY);
    Some(match name {
        "m" => si(1, 0, l),
        "cm" => si(1, -2, l),
        "mm" => si(1, -3, l),
        "um" | "\u{b5}m" | "\u{3bc}m" => si(1, -6, l),
        "nm" => si(1, -9, l),
        "pm" => si(1, -12, l),
        "angstrom" | "\u{c5}" | "\u{212b}" => si(1, -10, l),
        "s" => si(1, 0, t),
        "ms" => si(1, -3, t),
        "us" | "\u{b5}s" | "\u{3bc}s" => si(1, -6, t),
        "ns" => si(1, -9, t),
        "ps" => si(1, -12, t),
        "fs" => si(1, -15, t),
        "kg" => si(1, 0, Dim::MASS),
        "g" => si(1, -3, Dim::MASS),
        // g/mol is taken as the dalton (molar mass in g/mol = mass in Da); in the 2019 SI they
        // differ by 3.5e-10 relative, below any mass a scenario states
        "amu" | "u" | "Da" | "g/mol" => times(AMU_EXACT, 1, 0, Dim::MASS),
        "kDa" | "kg/mol" => times(AMU_EXACT, 1, 3, Dim::MASS),
        "J" => si(1, 0, en),
        "kJ" => si(1, 3, en),
        "zJ" => si(1, -21, en),
        "eV" => times(E_CHARGE_EXACT, 1, 0, en),
        "meV" => times(E_CHARGE_EXACT, 1, -3, en),
        "cal" => times(CALORIE_EXACT, 1, 0, en),
        "kcal" => times(CALORIE_EXACT, 1, 3, en),
        "J/mol" => per_mol(Exact::ONE, 1, 0),
        "kJ/mol" => per_mol(Exact::ONE, 1, 3),
        "cal/mol" => per_mol(CALORIE_EXACT, 1, 0),
        "kcal/mol" => per_mol(CALORIE_EXACT, 1, 3),
        "kT" | "kBT" | "k_BT" => Unit { kt: 1, ..Unit::ONE },
        "N" => si(1, 0, Dim::FORCE),
        "nN" => si(1, -9, Dim::FORCE),
        "pN" => si(1, -12, Dim::FORCE),
        "fN" => si(1, -15, Dim::FORCE),
        "Pa" => si(1, 0, Dim::PRESSURE),
        "mPa" => si(1, -3, Dim::PRESSURE),
        "P" => si(1, -1, Dim::VISCOSITY),
        "cP" => si(1, -3, Dim::VISCOSITY),
        "K" => si(1, 0, Dim::TEMPERATURE),
        _ => return None,
    })
}

/// Why a name is not a unit, when we can tell.
fn unknown_hint(name: &str) -> &'static str {
    match name {
        "A" => ": write angstrom or \u{c5} (A is the ampere)",
        "mol" => ": molar units are written with a slash: kJ/mol, kcal/mol, J/mol, g/mol",
        "Hz" | "kHz" | "MHz" | "GHz" | "THz" => {
            ": write rates as \"/s\" or \"s^-1\" (Hz leaves open whether cycles or radians are meant)"
        }
        "C" | "degC" | "\u{b0}C" | "\u{2103}" => ": temperatures are in kelvin (\"300 K\")",
        "kt" | "KT" | "kbT" | "kB_T" | "k_B_T" => ": write kT (or k_BT)",
        _ => ": see the README's Units section for the accepted names",
    }
}

/// `^n`, `**n` or superscript digits after a unit name; 1 when there is none.
fn power<'a>(s: &'a str, text: &str) -> Result<(i32, &'a str), UnitError> {
    let syntax = |why: &str| UnitError::Syntax {
        text: text.to_string(),
        why: why.to_string(),
    };
    let ascii = s.strip_prefix('^').or_else(|| s.strip_prefix("**"));
    let (neg, digits, rest) = if let Some(r) = ascii {
        let (neg, r) = match r.strip_prefix('-') {
            Some(r) => (true, r),
            None => (false, r.strip_prefix('+').unwrap_or(r)),
        };
        let end = r.find(|c: char| !c.is_ascii_digit()).unwrap_or(r.len());
        (neg, r[..end].to_string(), &r[end..])
    } else {
        const SUP: [char; 10] = [
            '\u{2070}', '\u{b9}', '\u{b2}', '\u{b3}', '\u{2074}', '\u{2075}', '\u{2076}',
            '\u{2077}', '\u{2078}', '\u{2079}',
        ];
        let (neg, r) = match s.strip_prefix('\u{207b}') {
            Some(r) => (true, r),
            None => (false, s),
        };
        let end = r.find(|c: char| !SUP.contains(&c)).unwrap_or(r.len());
        let digits: String = r[..end]
            .chars()
            .filter_map(|c| SUP.iter().position(|&d| d == c))
            .map(|d| char::from(b'0' + d as u8))
            .collect();
        if digits.is_empty() && !neg {
            return Ok((1, s));
        }
        (neg, digits, &r[end..])
    };
    let p: i32 = match digits.parse() {
        Ok(p) if p <= 9 => p,
        Ok(_) => return Err(syntax("a power above 9")),
        Err(_) => return Err(syntax("a power without digits")),
    };
    Ok((if neg { -p } else { p }, rest))
}

/// A unit expression: names joined by spaces, `*` or `·` (multiply) and `/` (divides by the one
/// name after it: kcal/mol/angstrom = kcal/(mol·angstrom)), each with an optional power.
fn parse_unit(s: &str, text: &str) -> Result<Unit, UnitError> {
    let syntax = |why: String| UnitError::Syntax {
        text: text.to_string(),
        why,
    };
    let mut unit = Unit::ONE;
    let mut rest = s.trim_start();
    // the operator before the next name: None at the start (a leading "/" is allowed)
    let mut op: Option<char> = None;
    let mut any = false;
    while !rest.is_empty() {
        let c = rest.chars().next().unwrap_or(' ');
        if c.is_whitespace() {
            rest = rest.trim_start();
            continue;
        }
        if matches!(c, '/' | '*' | '\u{b7}' | '\u{22c5}') {
            if op.is_some() || (c != '/' && !any) {
                return Err(syntax(format!("{c:?} where a unit name belongs")));
            }
            op = Some(c);
            rest = &rest[c.len_utf8()..];
            continue;
        }
        let end = rest
            .find(|c: char| !(c.is_alphabetic() || c == '_'))
            .unwrap_or(rest.len());
        if end == 0 {
            return Err(syntax(format!("unexpected {c:?}")));
        }
        let (mut name, mut after) = rest.split_at(end);
        // molar units keep their slash: "kJ/mol" is one name
        if let Some(tail) = after.strip_prefix("/mol")
            && !tail.starts_with(|c: char| c.is_alphabetic())
            && atom(&rest[..end + 4]).is_some()
        {
            name = &rest[..end + 4];
            after = tail;
        }
        let a = atom(name).ok_or_else(|| UnitError::UnknownUnit {
            text: text.to_string(),
            unit: name.to_string(),
            hint: unknown_hint(name),
        })?;
        let (p, r) = power(after, text)?;
        unit = unit.mul(a.powi(if op == Some('/') { -p } else { p }));
        op = None;
        any = true;
        rest = r;
    }
    if let Some(c) = op {
        return Err(syntax(format!("{c:?} with no unit after it")));
    }
    Ok(unit)
}

/// The leading number of a quantity string and the rest.
fn split_number(t: &str) -> Option<(&str, &str)> {
    let b = t.as_bytes();
    let digits = |mut i: usize| {
        while i < b.len() && b[i].is_ascii_digit() {
            i += 1;
        }
        i
    };
    let mut i = usize::from(matches!(b.first(), Some(b'+' | b'-')));
    let start = i;
    i = digits(i);
    let mut n = i - start;
    if b.get(i) == Some(&b'.') {
        let f = digits(i + 1);
        n += f - i - 1;
        i = f;
    }
    if n == 0 {
        return None;
    }
    if matches!(b.get(i), Some(b'e' | b'E')) {
        let j = i + 1 + usize::from(matches!(b.get(i + 1), Some(b'+' | b'-')));
        let k = digits(j);
        if k > j {
            i = k;
        }
    }
    Some(t.split_at(i))
}

/// The scenario's units as exact factors, for reading quantities typed with a unit.
#[derive(Debug, Clone)]
pub struct UnitScale {
    energy: Unit,
    length: Option<Unit>,
    time: Option<Unit>,
    mass: Option<Unit>,
    /// k_B·T in J, from the temperature's shortest decimal form (as typed)
    kt: Option<Factor>,
}

impl UnitScale {
    /// The scale of a scenario's `[units]`.
    ///
    /// # Errors
    /// Unknown unit names, a temperature that is not positive and finite.
    pub fn new(names: &UnitNames, temperature: Option<f64>) -> Result<Self, UnitError> {
        energy_joule(&names.energy)?;
        length_metre(&names.length)?;
        time_second(&names.time)?;
        mass_kg(&names.mass)?;
        if let Some(t) = temperature
            && !(t.is_finite() && t > 0.0)
        {
            return Err(UnitError::BadTemperature(t));
        }
        // every allowed name is an accepted unit name; "1" is reduced
        let base = |n: &str| if n == "1" { None } else { atom(n) };
        Ok(Self {
            energy: atom(&names.energy).unwrap_or(Unit::ONE),
            length: base(&names.length),
            time: base(&names.time),
            mass: base(&names.mass),
            kt: temperature.and_then(|t| {
                let (_, t) = Factor::decimal(&t.to_string())?;
                Some(t.mul(Factor::exact(K_B_EXACT)))
            }),
        })
    }

    /// The scale of a scenario without `[units]` (kT, all else reduced).
    pub fn reduced() -> Self {
        Self::new(&UnitNames::default(), None).expect("the default names are valid")
    }

    /// The scenario unit of `kind`.
    fn target(&self, kind: Kind, text: &str) -> Result<Unit, UnitError> {
        let [e, l, t, m] = kind.powers();
        let mut out = self.energy.powi(e);
        for (p, base, name) in [
            (l, self.length, "length"),
            (t, self.time, "time"),
            (m, self.mass, "mass"),
        ] {
            if p != 0 {
                let u = base.ok_or_else(|| UnitError::Reduced {
                    text: text.to_string(),
                    base: name,
                })?;
                out = out.mul(u.powi(p));
            }
        }
        Ok(out)
    }
}

/// Reads a quantity string, "number [unit]", as a value of `kind` in the scenario's units.
///
/// Without a unit the number is taken in the scenario's units, like a plain number. The unit is
/// a product of accepted names with powers (`um^2/s`, `/ps`, `ps^-1`, `mPa s`, `kcal/mol/angstrom`);
/// its dimension must be the key's. The conversion is exact up to one final rounding, except
/// where more than 36 significant digits would be needed (then it is done in double precision).
///
/// # Errors
/// Not a number and unit, an unknown unit, a unit of another dimension, a physical unit where
/// the scenario's unit is reduced, kT against another energy unit without a temperature.
pub fn read_quantity(text: &str, kind: Kind, scale: &UnitScale) -> Result<f64, UnitError> {
    let t = text.trim();
    let syntax = |why: &str| UnitError::Syntax {
        text: t.to_string(),
        why: why.to_string(),
    };
    let (number, rest) =
        split_number(t).ok_or_else(|| syntax("it does not start with a number"))?;
    let (neg, value) = Factor::decimal(number).ok_or_else(|| syntax("a malformed number"))?;
    let x = if rest.trim().is_empty() {
        value.approx
    } else {
        let unit = parse_unit(rest, t)?;
        if unit.full_dim() != kind.dim() {
            return Err(UnitError::Dimension {
                text: t.to_string(),
                expected: kind.expected(),
                found: unit.full_dim().name(),
            });
        }
        let target = match kind {
            Kind::Temperature => atom("K").unwrap_or(Unit::ONE),
            _ => scale.target(kind, t)?,
        };
        let mut f = value.mul(unit.factor).mul(target.factor.recip());
        let k = unit.kt - target.kt;
        if k != 0 {
            let kt = scale.kt.ok_or_else(|| UnitError::KtWithoutTemperature {
                text: t.to_string(),
            })?;
            f = f.mul(kt.powi(k));
        }
        f.value()
    };
    if !x.is_finite() {
        return Err(UnitError::NotFinite {
            text: t.to_string(),
        });
    }
    Ok(if neg { -x } else { x })
}

pub mod quantity {
    //! Deserialisers of dimensioned keys: a number in the scenario's units, or a string with a
    //! unit ("5 /ps") converted into them by [`read_quantity`] at the scale set by [`with_scale`].
    use super::{Kind, UnitError, UnitScale, read_quantity};
    use serde::de::{self, Deserialize, Deserializer, Visitor};
    use std::cell::RefCell;
    use std::fmt;

    thread_local! {
        /// The scale of the scenario being read: dimensioned keys convert unit strings on reading.
        static SCALE: RefCell<Option<UnitScale>> = const { RefCell::new(None) };
    }

    /// Runs `f` (a deserialisation) with `scale` as the scale for unit strings.
    pub fn with_scale<T>(scale: UnitScale, f: impl FnOnce() -> T) -> T {
        let before = SCALE.replace(Some(scale));
        let out = f();
        SCALE.set(before);
        out
    }

    /// A value as written.
    enum Raw {
        Number(f64),
        Text(String),
    }

    impl<'de> Deserialize<'de> for Raw {
        fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
            struct V;
            impl Visitor<'_> for V {
                type Value = Raw;
                fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                    f.write_str("a number or a string with a unit (e.g. \"1.5 nm\")")
                }
                fn visit_f64<E>(self, v: f64) -> Result<Raw, E> {
                    Ok(Raw::Number(v))
                }
                fn visit_i64<E>(self, v: i64) -> Result<Raw, E> {
                    Ok(Raw::Number(v as f64))
                }
                fn visit_u64<E>(self, v: u64) -> Result<Raw, E> {
                    Ok(Raw::Number(v as f64))
                }
                fn visit_str<E>(self, v: &str) -> Result<Raw, E> {
                    Ok(Raw::Text(v.to_string()))
                }
            }
            d.deserialize_any(V)
        }
    }

    impl Raw {
        fn value(self, kind: Kind) -> Result<f64, UnitError> {
            match self {
                Raw::Number(x) => Ok(x),
                Raw::Text(t) => SCALE.with_borrow(|s| match s {
                    Some(s) => read_quantity(&t, kind, s),
                    None => read_quantity(&t, kind, &UnitScale::reduced()),
                }),
            }
        }
    }

    fn one<'de, D: Deserializer<'de>>(d: D, kind: Kind) -> Result<Option<f64>, D::Error> {
        Option::<Raw>::deserialize(d)?
            .map(|r| r.value(kind).map_err(de::Error::custom))
            .transpose()
    }

    macro_rules! kinds {
        ($($name:ident => $kind:ident),* $(,)?) => {$(
            #[doc = concat!("An optional ", stringify!($name), ": a number, or a string with a unit.")]
            pub fn $name<'de, D: Deserializer<'de>>(d: D) -> Result<Option<f64>, D::Error> {
                one(d, Kind::$kind)
            }
        )*};
    }
    kinds!(
        energy => Energy,
        length => Length,
        time => Time,
        rate => Rate,
        diffusion => Diffusion,
        mass => Mass,
        force => Force,
        viscosity => Viscosity,
        temperature => Temperature,
    );

    /// Each entry of a list of lengths ("entry 2: ..." in errors).
    fn lengths<E: de::Error>(raw: Vec<Raw>) -> Result<Vec<f64>, E> {
        raw.into_iter()
            .enumerate()
            .map(|(i, r)| {
                r.value(Kind::Length)
                    .map_err(|e| E::custom(format!("entry {}: {e}", i + 1)))
            })
            .collect()
    }

    /// An optional list of lengths, each a number or a string with a unit.
    pub fn length_list<'de, D: Deserializer<'de>>(d: D) -> Result<Option<Vec<f64>>, D::Error> {
        Option::<Vec<Raw>>::deserialize(d)?.map(lengths).transpose()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // R = N_A k_B = 8.314462618 J/(mol K) (CODATA 2018, exact to the digits shown), so kT at 300 K is
    // 2.4943387854 kJ/mol; kcal/mol divides by 4.184 (thermochemical calorie).
    #[test]
    fn kt_in_molar_units_matches_codata() {
        let u = UnitSystem::new(
            UnitNames {
                energy: "kJ/mol".into(),
                ..UnitNames::default()
            },
            Some(300.0),
            false,
        )
        .unwrap();
        assert!((u.kt_in_energy_unit - 2.494_338_785_4).abs() < 1e-9);
        let kcal = energy_joule("kcal/mol").unwrap().unwrap();
        assert!((K_B * 300.0 / kcal - 2.494_338_785_4 / 4.184).abs() < 1e-9);
    }

    // kT at 300 K = 25.852 meV (CODATA 2018: k_B/e = 8.617333262e-5 eV/K) and 4.1419 zJ.
    #[test]
    fn kt_in_ev_and_zj_match_codata() {
        let ev = K_B * 300.0 / energy_joule("eV").unwrap().unwrap();
        assert!((ev - 8.617_333_262e-5 * 300.0).abs() < 1e-12);
        let zj = K_B * 300.0 / energy_joule("zJ").unwrap().unwrap();
        assert!((zj - 4.141_947).abs() < 1e-6);
    }

    // One amu, nm, ps at 300 K: m = 1.66053906660e-27 * 1e-18 / (1e-24 * 4.141947e-21) = 0.400908...
    #[test]
    fn molecular_mass_factor() {
        let u = UnitSystem::new(
            UnitNames {
                energy: "kJ/mol".into(),
                length: "nm".into(),
                time: "ps".into(),
                mass: "amu".into(),
            },
            Some(300.0),
            true,
        )
        .unwrap();
        let expect = AMU * 1e-18 / (1e-24 * K_B * 300.0);
        assert!((u.mass_factor.unwrap() - expect).abs() < 1e-15);
        assert!((expect - 0.400_908_6).abs() < 1e-6);
    }

    #[test]
    fn reduced_system_is_identity_and_mixed_is_refused() {
        let u = UnitSystem::new(UnitNames::default(), None, true).unwrap();
        assert_eq!(u.mass_factor, Some(1.0));
        assert_eq!(u.energy_to_kt(3.0), 3.0);
        let mixed = UnitSystem::new(
            UnitNames {
                length: "nm".into(),
                ..UnitNames::default()
            },
            Some(300.0),
            true,
        );
        assert!(matches!(mixed, Err(UnitError::Mixed { .. })));
        let no_t = UnitSystem::new(
            UnitNames {
                energy: "eV".into(),
                ..UnitNames::default()
            },
            None,
            false,
        );
        assert!(matches!(no_t, Err(UnitError::NeedTemperature { .. })));
        assert!(matches!(
            energy_joule("Hartree"),
            Err(UnitError::Unknown { .. })
        ));
    }

    fn scale(energy: &str, length: &str, time: &str, mass: &str, t: Option<f64>) -> UnitScale {
        let names = UnitNames {
            energy: energy.into(),
            length: length.into(),
            time: time.into(),
            mass: mass.into(),
        };
        UnitScale::new(&names, t).unwrap()
    }

    fn molecular() -> UnitScale {
        scale("kJ/mol", "nm", "ps", "amu", Some(300.0))
    }

    // The decimal constants are the f64 constants' own decimals (CODATA 2018).
    #[test]
    fn exact_constants_are_the_codata_decimals() {
        assert_eq!(K_B_EXACT.to_f64(), Some(K_B));
        assert_eq!(N_A_EXACT.to_f64(), Some(N_A));
        assert_eq!(E_CHARGE_EXACT.to_f64(), Some(E_CHARGE));
        assert_eq!(AMU_EXACT.to_f64(), Some(AMU));
        assert_eq!(CALORIE_EXACT.to_f64(), Some(CALORIE));
        // 1/3 and 2/3 round to the nearest double (the literals below are those doubles)
        let third = Exact {
            num: 1,
            den: 3,
            exp: 0,
        };
        assert_eq!(third.to_f64(), Some(0.333_333_333_333_333_3));
        assert_eq!(
            third.mul(Exact::dec(2, 0)).unwrap().to_f64(),
            Some(0.666_666_666_666_666_6)
        );
    }

    // SI prefixes are exact decimal factors; the results are the doubles of the decimals written
    // (bitwise), where a product of doubles would not be: 0.3e-6/1e-9 = 299.99999999999994 and
    // 1.5e-9/1e-10 = 15.000000000000002 in floating point.
    #[test]
    fn decimal_factors_are_exact() {
        let s = molecular();
        let read = |t: &str, k: Kind| read_quantity(t, k, &s).unwrap();
        assert_eq!(read("0.3 um", Kind::Length), 300.0);
        assert_eq!(read("0.3 \u{b5}m", Kind::Length), 300.0);
        assert_eq!(read("0.3 \u{3bc}m", Kind::Length), 300.0);
        assert_eq!(read("-5 angstrom", Kind::Length), -0.5);
        assert_eq!(read("-5 \u{c5}", Kind::Length), -0.5);
        assert_eq!(read("-5 \u{212b}", Kind::Length), -0.5);
        assert_eq!(read("50 pm", Kind::Length), 0.05);
        assert_eq!(read("2 fs", Kind::Time), 0.002);
        assert_eq!(read("1e-3 us", Kind::Time), 1000.0);
        // (1e-6 m)^2/s = 1e-12 m^2/s = 1e-12 * 1e18 nm^2 / (1e12 ps) = 1e-6 nm^2/ps
        assert_eq!(read("0.2 um^2/s", Kind::Diffusion), 2e-7);
        assert_eq!(read("0.2 \u{b5}m\u{b2}/s", Kind::Diffusion), 2e-7);
        for t in [
            "5 /ps",
            "5/ps",
            "5 ps^-1",
            "5 ps**-1",
            "5 ps\u{207b}\u{b9}",
            "5e12 /s",
            "5e12 s^-1",
        ] {
            assert_eq!(read_quantity(t, Kind::Rate, &s), Ok(5.0), "{t}");
        }
        let s_ns = scale("kT", "nm", "ns", "1", None);
        assert_eq!(read_quantity("5 /ps", Kind::Rate, &s_ns), Ok(5000.0));
        // a string without a unit is a number in the scenario's units
        assert_eq!(read("7.25", Kind::Rate), 7.25);
    }

    // Energies: 1 kcal = 4.184 kJ (thermochemical calorie, exact); 1 eV = 1.602176634e-19 J and
    // N_A = 6.02214076e23 /mol (SI 2019, exact), so 1 eV per particle = N_A e J/mol = F J/mol with
    // F = 96485.3321233100184 C/mol (exact); 1 pN = 1e-12 J/m = 1 zJ/nm.
    #[test]
    #[allow(clippy::excessive_precision)] // the exact decimal, which the parser rounds
    fn energy_and_force_factors() {
        let s = molecular();
        let read = |t: &str, k: Kind| read_quantity(t, k, &s).unwrap();
        assert_eq!(read("1 kcal/mol", Kind::Energy), 4.184);
        assert_eq!(read("4184 J/mol", Kind::Energy), 4.184);
        assert_eq!(read("1 eV", Kind::Energy), 96.485_332_123_310_018_4);
        assert_eq!(read("1000 meV", Kind::Energy), 96.485_332_123_310_018_4);
        assert_eq!(read("1 kcal/mol/angstrom", Kind::Force), 41.84);
        let kcal = scale("kcal/mol", "nm", "ps", "amu", None);
        assert_eq!(read_quantity("8.368 kJ/mol", Kind::Energy, &kcal), Ok(2.0));
        let zj = scale("zJ", "nm", "ps", "amu", None);
        assert_eq!(read_quantity("2 pN", Kind::Force, &zj), Ok(2.0));
        assert_eq!(read_quantity("1 eV", Kind::Energy, &zj), Ok(160.217_663_4));
    }

    // kT = k_B T: R = N_A k_B = 8.31446261815324 J/(mol K) exactly (SI 2019), so 3 kT at 300 K is
    // 3 * 8.31446261815324 * 300 / 1000 = 7.483016356337916 kJ/mol exactly.
    #[test]
    fn thermal_energy_needs_the_temperature() {
        let s = molecular();
        assert_eq!(
            read_quantity("3 kT", Kind::Energy, &s),
            Ok(7.483_016_356_337_916)
        );
        assert_eq!(
            read_quantity("3 k_BT", Kind::Energy, &s),
            Ok(7.483_016_356_337_916)
        );
        // into kT: 35 kJ/mol / (R * 300 K); the f64 chain below rounds 3 times, so 2 ulp
        let kt = scale("kT", "nm", "ps", "1", Some(300.0));
        let x = read_quantity("35 kJ/mol", Kind::Energy, &kt).unwrap();
        let chain = 35e3 / N_A / (K_B * 300.0);
        assert!(
            (x - chain).abs() <= 2.0 * f64::EPSILON * chain,
            "{x} {chain}"
        );
        // kT into kT needs no temperature; kT against a molar unit does, and says so
        let no_t = scale("kT", "nm", "ps", "1", None);
        assert_eq!(read_quantity("3 kT", Kind::Energy, &no_t), Ok(3.0));
        assert_eq!(read_quantity("2 kT/nm", Kind::Force, &no_t), Ok(2.0));
        let e = read_quantity("35 kJ/mol", Kind::Energy, &no_t).unwrap_err();
        assert!(matches!(e, UnitError::KtWithoutTemperature { .. }));
        assert!(e.to_string().contains("units.temperature"), "{e}");
        let e = read_quantity("3 kT", Kind::Energy, &scale("eV", "1", "1", "1", None));
        assert!(e.is_err());
    }

    // 1 Da = 1 u = 1.66053906660e-27 kg (CODATA 2018); g/mol is taken as Da (see `atom`).
    #[test]
    fn mass_factors() {
        let s = molecular();
        let read = |t: &str| read_quantity(t, Kind::Mass, &s).unwrap();
        assert_eq!(read("12 Da"), 12.0);
        assert_eq!(read("12 g/mol"), 12.0);
        assert_eq!(read("12 u"), 12.0);
        assert_eq!(read("2 kDa"), 2000.0);
        assert_eq!(read("2 kg/mol"), 2000.0);
        let kg = scale("kJ/mol", "nm", "ps", "kg", Some(300.0));
        assert_eq!(
            read_quantity("12 Da", Kind::Mass, &kg),
            Ok(1.992_646_879_92e-26)
        );
    }

    // 1 cP = 1 mPa s = 1e-3 J s/m^3; in kJ/mol ps/nm^3: 1e-3 * (N_A/1e3) * 1e12 / 1e27, so
    // 0.89 cP = 0.89 * 602.214076 = 535.97052764 exactly (a product of doubles gives ...99).
    #[test]
    fn viscosity_and_temperature() {
        let s = molecular();
        for t in [
            "0.89 mPa s",
            "0.89 mPa*s",
            "0.89 mPa\u{b7}s",
            "0.89 cP",
            "8.9e-4 Pa s",
        ] {
            assert_eq!(
                read_quantity(t, Kind::Viscosity, &s),
                Ok(535.970_527_64),
                "{t}"
            );
        }
        assert_eq!(read_quantity("300 K", Kind::Temperature, &s), Ok(300.0));
        assert_eq!(
            read_quantity("298.15 K", Kind::Temperature, &UnitScale::reduced()),
            Ok(298.15)
        );
    }

    #[test]
    fn mistakes_are_named() {
        let s = molecular();
        let err = |t: &str, k: Kind| read_quantity(t, k, &s).unwrap_err();
        let e = err("1.5 nm", Kind::Rate);
        assert!(matches!(e, UnitError::Dimension { .. }));
        assert!(
            e.to_string().contains("expected a rate") && e.to_string().contains("found a length"),
            "{e}"
        );
        assert!(
            err("1 kg", Kind::Energy)
                .to_string()
                .contains("found a mass")
        );
        assert!(
            err("1 Pa", Kind::Viscosity)
                .to_string()
                .contains("found a pressure")
        );
        assert!(err("3 A", Kind::Length).to_string().contains("ampere"));
        assert!(
            err("3 kJ mol^-1", Kind::Energy)
                .to_string()
                .contains("kJ/mol")
        );
        assert!(err("3 Hz", Kind::Rate).to_string().contains("/s"));
        assert!(err("3 parsec", Kind::Length).to_string().contains("parsec"));
        for t in [
            "nm", "", "5 / / ps", "5 ps^", "5 *nm", "5 nm/", "5 ps^12", "5 (nm)",
        ] {
            assert!(
                matches!(err(t, Kind::Length), UnitError::Syntax { .. }),
                "{t}: {}",
                err(t, Kind::Length)
            );
        }
        let reduced = UnitScale::reduced();
        let e = read_quantity("1.5 nm", Kind::Length, &reduced).unwrap_err();
        assert!(e.to_string().contains("units.length is \"1\""), "{e}");
        assert!(matches!(
            read_quantity("1e400 nm", Kind::Length, &s),
            Err(UnitError::NotFinite { .. })
        ));
    }
}
