//! A study: the physical [`System`] with its units, labels and the settings of the simulation
//! and the uncertainty propagation, in internal units (energies in kT, lengths in units.length,
//! times in units.time, masses in kT·time²/length²). The scenario module reads one from a file;
//! everything else takes it as it is.

use crate::simulate::Settings;
use crate::system::System;
use crate::uncertainty::UncertaintyOptions;
use crate::units::UnitSystem;

/// A validated study in internal units.
#[derive(Debug, Clone)]
pub struct Model {
    /// the file the scenario came from (for messages)
    pub source: String,
    /// free text
    pub title: Option<String>,
    /// unit conversion
    pub units: UnitSystem,
    /// the physical system (potential, D, mass, friction, memory, period, start, target)
    pub system: System,
    /// a short description of the potential for reports
    pub potential_label: String,
    /// the `[simulation]` settings, if any
    pub simulation: Option<Settings>,
    /// the `[uncertainty]` settings (defaults when absent)
    pub uncertainty: UncertaintyOptions,
    /// true when an `[uncertainty]` section was given
    pub uncertainty_given: bool,
}

impl Model {
    /// The settings of the uncertainty propagation (defaults where the scenario gives none).
    pub fn uncertainty_options(&self) -> UncertaintyOptions {
        self.uncertainty
    }
}

/// A validated two-coordinate study in internal units.
#[derive(Debug, Clone)]
pub struct PlaneModel {
    /// the file the scenario came from (for messages)
    pub source: String,
    /// free text
    pub title: Option<String>,
    /// unit conversion
    pub units: UnitSystem,
    /// the physical system
    pub system: crate::system::PlaneSystem,
    /// a short description of the surface for reports
    pub surface_label: String,
    /// what the scenario gave but this version does not use (shown as warnings)
    pub notes: Vec<String>,
}

/// A study of either dimension: the dimension is a property of the loaded system.
#[derive(Debug, Clone)]
pub enum Study {
    /// one coordinate (`[potential]`)
    Line(Box<Model>),
    /// two coordinates (`[surface]`)
    Plane(Box<PlaneModel>),
}

impl Study {
    /// 1 or 2.
    pub fn dimension(&self) -> usize {
        match self {
            Study::Line(_) => 1,
            Study::Plane(_) => 2,
        }
    }
}
