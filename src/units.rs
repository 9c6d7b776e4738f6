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
}
