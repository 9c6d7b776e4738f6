//! The scenario file (TOML): reading, `--set` overrides, validation, and the reduction to a
//! [`Model`] in internal units (kT = 1; see [`crate::units`]).
//!
//! Every error names the file and the line (syntax and type errors) or the key (missing,
//! inconsistent or non-physical values). Overrides given as `section.key=value` are applied to the
//! parsed document before validation, so they are checked exactly like values in the file.
//! Dimensioned values may be strings with a unit ("5 /ps"), converted into the scenario's units
//! while the file is read ([`crate::units::read_quantity`]; the `[units]` section is read first).
//!
//! Parts: `file` (the sections as written, serde), `validate` (checks across sections and the
//! reduction to a [`Model`]), `potential` (the `[potential]` section: formula, family or table,
//! domain, periodic extension), `plane` (two-coordinate scenarios: `[surface]`, the tensor
//! `[particle]` keys, point `[states]`, reduced to a [`PlaneModel`]; [`Study::load`] reads
//! either dimension, [`Model::load`] only one).

mod file;
mod plane;
mod potential;
mod validate;

pub use plane::{PlaneFile, PlaneParticleSection, PlaneStatesSection, Shape, SurfaceSection};

pub use file::{
    ParticleSection, PotentialSection, ScenarioFile, StatesSection, UncertaintySection,
    UnitsSection,
};
use validate::Validator;

pub use crate::model::{Model, PlaneModel, Study};
use crate::units::quantity::with_scale;
use std::path::Path;
use thiserror::Error;

/// A scenario problem, naming the file and the line or key.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum ScenarioError {
    /// The file could not be read.
    #[error("{file}: cannot read: {message}")]
    Io {
        /// the file
        file: String,
        /// the OS message
        message: String,
    },
    /// A syntax or type error at a line.
    #[error("{file}: line {line}{key}: {message}")]
    Line {
        /// the file
        file: String,
        /// 1-based line
        line: usize,
        /// " (key a.b)" or empty
        key: String,
        /// what is wrong
        message: String,
    },
    /// A missing, inconsistent or non-physical value.
    #[error("{file}: {key}: {message}")]
    Key {
        /// the file (or "--set")
        file: String,
        /// dotted key
        key: String,
        /// what is wrong
        message: String,
    },
    /// A bad `--set` argument.
    #[error("--set {arg}: {message}")]
    Override {
        /// the argument as given
        arg: String,
        /// what is wrong
        message: String,
    },
}

/// Internal masses, frictions and diffusion coefficients must lie in this range: beyond it actions
/// and Boltzmann factors overflow double precision in intermediate steps.
pub const INTERNAL_RANGE: (f64, f64) = (1e-150, 1e150);

/// One `--set section.key=value`.
#[derive(Debug, Clone, PartialEq)]
pub struct Override {
    /// path of keys
    pub path: Vec<String>,
    /// the TOML value
    pub value: toml::Value,
    /// the argument as given
    pub arg: String,
}

impl Override {
    /// Parses `section.key=value`; the value is read as TOML (a number, boolean, array, quoted
    /// string) and otherwise taken as a bare string.
    ///
    /// # Errors
    /// No `=`, or an empty key part.
    pub fn parse(arg: &str) -> Result<Self, ScenarioError> {
        let bad = |m: &str| ScenarioError::Override {
            arg: arg.to_string(),
            message: m.to_string(),
        };
        let (k, v) = arg
            .split_once('=')
            .ok_or_else(|| bad("expected section.key=value"))?;
        let path: Vec<String> = k.trim().split('.').map(|s| s.trim().to_string()).collect();
        if path.iter().any(String::is_empty) {
            return Err(bad("empty key name (expected section.key=value)"));
        }
        let v = v.trim();
        let value = format!("v = {v}")
            .parse::<toml::Table>()
            .ok()
            .and_then(|mut t| t.remove("v"))
            .unwrap_or_else(|| toml::Value::String(v.to_string()));
        Ok(Self {
            path,
            value,
            arg: arg.to_string(),
        })
    }
}

/// A scenario file with its `--set` overrides as the source of a scan's points: each point is
/// the file read again with the scanned key (and the point's seed) set after the overrides.
#[derive(Debug, Clone, Copy)]
pub struct FileVariants<'a> {
    /// the scenario file
    pub file: &'a Path,
    /// the `--set` overrides, applied first
    pub base: &'a [Override],
}

impl crate::scan::Variants for FileVariants<'_> {
    fn at(
        &self,
        key: &str,
        value: f64,
        seed: Option<u64>,
    ) -> Result<Model, crate::scan::ScanError> {
        let study = |e: ScenarioError| crate::scan::ScanError::Study(Box::new(e));
        let mut o = self.base.to_vec();
        o.push(Override::parse(&format!("{key}={value:?}")).map_err(study)?);
        if let Some(seed) = seed {
            o.push(Override::parse(&format!("simulation.seed={seed}")).map_err(study)?);
        }
        Model::load(self.file, &o).map_err(study)
    }

    fn source(&self) -> String {
        self.file.display().to_string()
    }
}

/// The text of a scenario file (UTF-8 checked) and the folder its relative paths start from.
fn read_text(path: &Path) -> Result<(String, std::path::PathBuf), ScenarioError> {
    let file = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|e| ScenarioError::Io {
        file: file.clone(),
        message: e.to_string(),
    })?;
    let text = String::from_utf8(bytes).map_err(|e| {
        let line = e.as_bytes()[..e.utf8_error().valid_up_to()]
            .iter()
            .filter(|&&b| b == b'\n')
            .count()
            + 1;
        ScenarioError::Line {
            file: file.clone(),
            line,
            key: String::new(),
            message: "the file is not UTF-8 text".into(),
        }
    })?;
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    Ok((text, base))
}

/// Whether a scenario (with its overrides) has a `[surface]` section: a two-coordinate study.
/// Text that does not parse is left to the one-coordinate reader, which reports its line.
fn is_plane(text: &str, overrides: &[Override]) -> bool {
    overrides.iter().any(|o| o.path[0] == "surface")
        || text
            .parse::<toml::Table>()
            .is_ok_and(|t| t.contains_key("surface"))
}

impl Study {
    /// Reads, overrides and validates a scenario file of either dimension.
    ///
    /// # Errors
    /// See [`ScenarioError`]: every message names the file and the line or key.
    pub fn load(path: &Path, overrides: &[Override]) -> Result<Self, ScenarioError> {
        let (text, base) = read_text(path)?;
        Self::from_text(&text, &path.display().to_string(), &base, overrides)
    }

    /// Validates scenario text of either dimension; `base` is the folder that relative table
    /// paths start from.
    ///
    /// # Errors
    /// See [`ScenarioError`].
    pub fn from_text(
        text: &str,
        file: &str,
        base: &Path,
        overrides: &[Override],
    ) -> Result<Self, ScenarioError> {
        if !is_plane(text, overrides) {
            return Model::from_text(text, file, base, overrides).map(|m| Study::Line(Box::new(m)));
        }
        let validator = Validator::new(file, base, overrides);
        let pf: PlaneFile =
            parse_overridden(text, file, overrides, validator.scale(text, overrides)?)?;
        validator.build_plane(pf).map(|m| Study::Plane(Box::new(m)))
    }
}

/// Deserialises the text with its overrides applied (unit strings at `scale`); an error names
/// the line, or the override that caused it.
fn parse_overridden<T: serde::de::DeserializeOwned>(
    text: &str,
    file: &str,
    overrides: &[Override],
    scale: crate::units::UnitScale,
) -> Result<T, ScenarioError> {
    with_scale(scale, || -> Result<T, ScenarioError> {
        let plain: T = toml::from_str(text).map_err(|e| toml_error(text, file, &e))?;
        if overrides.is_empty() {
            return Ok(plain);
        }
        let mut doc: toml::Table = text.parse().map_err(|e| toml_error(text, file, &e))?;
        // check after each override, so an error names the one that caused it
        let mut last = None;
        for o in overrides {
            apply_override(&mut doc, o)?;
            let checked: T =
                doc.clone()
                    .try_into()
                    .map_err(|e: toml::de::Error| ScenarioError::Override {
                        arg: o.arg.clone(),
                        message: e.message().trim().replace('\n', " "),
                    })?;
            last = Some(checked);
        }
        Ok(last.expect("at least one override"))
    })
}

impl Model {
    /// Reads, overrides and validates a one-coordinate scenario file (a two-coordinate one is
    /// refused with a message naming `surface`; [`Study::load`] reads both).
    ///
    /// # Errors
    /// See [`ScenarioError`]: every message names the file and the line or key.
    pub fn load(path: &Path, overrides: &[Override]) -> Result<Self, ScenarioError> {
        let (text, base) = read_text(path)?;
        Self::from_text(&text, &path.display().to_string(), &base, overrides)
    }

    /// Validates scenario text; `base` is the folder that relative table paths start from.
    ///
    /// # Errors
    /// See [`ScenarioError`].
    pub fn from_text(
        text: &str,
        file: &str,
        base: &Path,
        overrides: &[Override],
    ) -> Result<Self, ScenarioError> {
        let validator = Validator::new(file, base, overrides);
        if is_plane(text, overrides) {
            return Err(validator.err(
                "surface",
                "not yet available for two-coordinate scenarios ([surface]): survey and rate read them",
            ));
        }
        // unit strings are converted while reading, so the units (after every override) come first
        let scale = validator.scale(text, overrides)?;
        let sf: ScenarioFile = parse_overridden(text, file, overrides, scale)?;
        validator.build(sf)
    }
}

pub(super) fn apply_override(doc: &mut toml::Table, o: &Override) -> Result<(), ScenarioError> {
    let mut t = doc;
    let (last, sections) = o.path.split_last().expect("non-empty path");
    for s in sections {
        let entry = t
            .entry(s.clone())
            .or_insert_with(|| toml::Value::Table(toml::Table::new()));
        t = match entry {
            toml::Value::Table(inner) => inner,
            _ => {
                return Err(ScenarioError::Override {
                    arg: o.arg.clone(),
                    message: format!("\"{s}\" is a value, not a section"),
                });
            }
        };
    }
    t.insert(last.clone(), o.value.clone());
    Ok(())
}

/// Turns a toml error into one line with the line number and, when the line holds `key = ...`,
/// the dotted key.
pub(super) fn toml_error(text: &str, file: &str, e: &toml::de::Error) -> ScenarioError {
    let message = e.message().trim().replace('\n', " ");
    match e.span() {
        Some(span) => {
            let start = span.start.min(text.len());
            let line = text[..start].bytes().filter(|&b| b == b'\n').count() + 1;
            ScenarioError::Line {
                file: file.to_string(),
                line,
                key: key_at_line(text, line)
                    .map(|k| format!(" (key {k})"))
                    .unwrap_or_default(),
                message,
            }
        }
        None => ScenarioError::Key {
            file: file.to_string(),
            key: "(file)".into(),
            message,
        },
    }
}

fn key_at_line(text: &str, line: usize) -> Option<String> {
    let mut section = String::new();
    for (i, l) in text.lines().enumerate() {
        let t = l.trim();
        if t.starts_with('[') {
            section = t.trim_matches(|c| c == '[' || c == ']').trim().to_string();
        }
        if i + 1 == line {
            let (k, _) = t.split_once('=')?;
            let k = k.trim();
            return Some(if section.is_empty() {
                k.to_string()
            } else {
                format!("{section}.{k}")
            });
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::potential::Potential;

    fn load(text: &str) -> Result<Model, ScenarioError> {
        Model::from_text(text, "s.toml", Path::new("."), &[])
    }

    const OK: &str = "[particle]\nmass = 1.0\nfriction = 2.0\n[potential]\nfamily = \"double-well\"\nbarrier = 5.0\nhalf_width = 1.0\n";

    #[test]
    fn loads_and_derives_diffusion() {
        let m = load(OK).unwrap();
        assert_eq!(m.system.diffusion.constant(), Some(0.5));
        assert_eq!(m.system.friction, Some(2.0));
    }

    #[test]
    fn errors_name_line_or_key() {
        let e = load("[particle]\nmass = \"a\"\n").unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("particle.mass"), "{e}");
        let e = load(&OK.replace("mass = 1.0", "mas = 1.0"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("line 2") && e.contains("mas"), "{e}");
        let e = load(&OK.replace("friction = 2.0", "friction = -2.0"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("particle.friction"), "{e}");
        let e = load(&format!("[units]\ntemperature = -3\n{OK}"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("units.temperature"), "{e}");
        let e = load(&OK.replace("barrier = 5.0\n", ""))
            .unwrap_err()
            .to_string();
        assert!(e.contains("potential.barrier"), "{e}");
    }

    #[test]
    fn overrides_apply_and_are_checked() {
        let o = [Override::parse("potential.barrier=8").unwrap()];
        let m = Model::from_text(OK, "s.toml", Path::new("."), &o).unwrap();
        assert!((m.system.potential.u(0.0) - 8.0).abs() < 1e-12);
        let o = [Override::parse("potential.family=cubic").unwrap()];
        let e = Model::from_text(OK, "s.toml", Path::new("."), &o).unwrap_err();
        assert!(e.to_string().contains("potential.half_width"), "{e}");
        let o = [Override::parse("particle.nope=1").unwrap()];
        let e = Model::from_text(OK, "s.toml", Path::new("."), &o).unwrap_err();
        assert!(e.to_string().contains("--set"), "{e}");
        assert!(Override::parse("novalue").is_err());
    }
}
