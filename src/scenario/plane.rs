//! Two-coordinate scenarios: a `[surface]` section instead of `[potential]`. The sections as
//! written (serde, unknown keys rejected) and their reduction to a [`PlaneModel`].
//!
//! `[particle]` here takes `diffusion` as a number (isotropic), `[Dxx, Dyy]` or
//! `[[Dxx, Dxy], [Dyx, Dyy]]` (symmetric positive definite), `mass` as a number or `[mx, my]`,
//! and `friction` as one rate γ (D = kT/(m_i γ) per coordinate).

use super::file::UnitsSection;
use super::{INTERNAL_RANGE, ScenarioError, Validator};
use crate::model::PlaneModel;
use crate::potential::formula::Formula2;
use crate::potential::grid::GridSurface;
use crate::potential::surface::{DiffusionTensor, FormulaSurface, MullerBrown, Point, Rect};
use crate::system::{PlaneSurface, PlaneSystem};
use crate::units::UnitSystem;
use crate::units::quantity;
use serde::Deserialize;
use serde::de::{self, Deserializer};
use std::collections::BTreeMap;

/// A key that is a number or a small list of numbers (each a number or a string with a unit).
#[derive(Debug, Clone, PartialEq)]
pub enum Shape {
    /// one value
    Scalar(f64),
    /// [a, b]
    Pair([f64; 2]),
    /// [[a, b], [c, d]]
    Matrix([[f64; 2]; 2]),
}

/// Reads a number, a 2-list or a 2×2 nested list, each entry through `leaf` (a unit-aware
/// deserialiser of [`quantity`]).
fn shape<'de, D: Deserializer<'de>>(
    d: D,
    leaf: fn(toml::Value) -> Result<Option<f64>, toml::de::Error>,
    matrix: bool,
) -> Result<Option<Shape>, D::Error> {
    let Some(v) = Option::<toml::Value>::deserialize(d)? else {
        return Ok(None);
    };
    let expected = if matrix {
        "a number, [xx, yy] or [[xx, xy], [yx, yy]]"
    } else {
        "a number or [x, y]"
    };
    let wrong = || de::Error::custom(format!("expected {expected}"));
    let one = |v: &toml::Value| -> Result<f64, D::Error> {
        match v {
            toml::Value::Integer(_) | toml::Value::Float(_) | toml::Value::String(_) => {
                leaf(v.clone())
                    .map_err(|e| de::Error::custom(e.message().trim().replace('\n', " ")))?
                    .ok_or_else(|| de::Error::custom("expected a number"))
            }
            _ => Err(wrong()),
        }
    };
    match &v {
        toml::Value::Array(a) => match a.as_slice() {
            [toml::Value::Array(r0), toml::Value::Array(r1)] if matrix => {
                match (r0.as_slice(), r1.as_slice()) {
                    ([a, b], [c, d]) => Ok(Some(Shape::Matrix([
                        [one(a)?, one(b)?],
                        [one(c)?, one(d)?],
                    ]))),
                    _ => Err(wrong()),
                }
            }
            [a, b] => Ok(Some(Shape::Pair([one(a)?, one(b)?]))),
            _ => Err(wrong()),
        },
        other => Ok(Some(Shape::Scalar(one(other)?))),
    }
}

fn diffusion_shape<'de, D: Deserializer<'de>>(d: D) -> Result<Option<Shape>, D::Error> {
    shape(d, quantity::diffusion, true)
}

fn mass_shape<'de, D: Deserializer<'de>>(d: D) -> Result<Option<Shape>, D::Error> {
    shape(d, quantity::mass, false)
}

/// `[particle]` of a two-coordinate scenario.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlaneParticleSection {
    /// mass (units.mass): a number or [mx, my]
    #[serde(default, deserialize_with = "mass_shape")]
    pub mass: Option<Shape>,
    /// friction rate γ per units.time
    #[serde(default, deserialize_with = "quantity::rate")]
    pub friction: Option<f64>,
    /// D (length²/time): a number, [Dxx, Dyy] or [[Dxx, Dxy], [Dyx, Dyy]]
    #[serde(default, deserialize_with = "diffusion_shape")]
    pub diffusion: Option<Shape>,
}

/// `[surface]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SurfaceSection {
    /// U(x, y) formula (units.energy)
    pub expr: Option<String>,
    /// grid table (long format x, y, U[, sigma_U]), relative to the scenario
    pub table: Option<String>,
    /// family name ("muller-brown")
    pub family: Option<String>,
    /// muller-brown: the energy of one unit of its published parameters, in units.energy
    #[serde(default, deserialize_with = "quantity::energy")]
    pub scale: Option<f64>,
    /// box along x: [lo, hi]
    #[serde(default, deserialize_with = "quantity::length_list")]
    pub x: Option<Vec<f64>>,
    /// box along y: [lo, hi]
    #[serde(default, deserialize_with = "quantity::length_list")]
    pub y: Option<Vec<f64>>,
    /// named constants usable in expr
    pub constants: Option<BTreeMap<String, f64>>,
}

/// `[states]` of a two-coordinate scenario.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlaneStatesSection {
    /// [x, y]: the reactant is the minimum this point descends to
    #[serde(default, deserialize_with = "quantity::length_list")]
    pub start: Option<Vec<f64>>,
    /// [x, y]: the product is the minimum this point descends to
    #[serde(default, deserialize_with = "quantity::length_list")]
    pub target: Option<Vec<f64>>,
    /// radius of the product disk around the product minimum (units.length)
    #[serde(default, deserialize_with = "quantity::length")]
    pub product_radius: Option<f64>,
}

/// A two-coordinate scenario file as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlaneFile {
    /// free text
    pub title: Option<String>,
    /// `[units]`
    #[serde(default)]
    pub units: UnitsSection,
    /// `[particle]`
    pub particle: Option<PlaneParticleSection>,
    /// `[surface]`
    pub surface: Option<SurfaceSection>,
    /// `[potential]`: only read to refuse it beside `[surface]`
    pub potential: Option<toml::Value>,
    /// `[states]`
    #[serde(default)]
    pub states: PlaneStatesSection,
    /// `[simulation]`: kept for the two-coordinate engine, not read yet
    pub simulation: Option<toml::Value>,
}

/// Surfaces the family and the box defaults: `muller-brown` only.
pub const SURFACE_FAMILIES: &str = "muller-brown";

impl Validator<'_> {
    /// The reduction of a two-coordinate file.
    pub(super) fn build_plane(&self, pf: PlaneFile) -> Result<PlaneModel, ScenarioError> {
        if pf.potential.is_some() {
            return Err(self.err(
                "surface",
                "give [surface] (two coordinates) or [potential] (one coordinate), not both",
            ));
        }
        let sec = pf
            .surface
            .clone()
            .ok_or_else(|| self.err("surface", "the [surface] section is required"))?;
        let p = pf.particle.clone().unwrap_or_default();
        let mass = match &p.mass {
            None => None,
            Some(Shape::Scalar(m)) => Some([*m, *m]),
            Some(Shape::Pair(m)) => Some(*m),
            Some(Shape::Matrix(_)) => {
                return Err(self.err("particle.mass", "must be a number or [mx, my]"));
            }
        };
        if let Some(m) = mass
            && !m.iter().all(|v| v.is_finite() && *v > 0.0)
        {
            return Err(self.err(
                "particle.mass",
                format!("must be positive numbers, got {m:?}"),
            ));
        }
        let units = UnitSystem::new(pf.units.names(), pf.units.temperature, mass.is_some())
            .map_err(|e| self.unit_err(&e))?;
        let mass = mass.map(|m| m.map(|v| units.mass_to_internal(v).unwrap_or(v)));
        let friction = self.positive("particle.friction", p.friction)?;
        let diffusion = self.plane_diffusion(&p, mass, friction)?;
        let in_range = |key: &str, vals: &[f64]| {
            match vals
                .iter()
                .find(|v| !(INTERNAL_RANGE.0..=INTERNAL_RANGE.1).contains(&v.abs()))
            {
                Some(v) => Err(self.err(
                    key,
                    format!(
                        "{v:e} in internal units is outside [{:e}, {:e}]: choose units closer to the problem's scale",
                        INTERNAL_RANGE.0, INTERNAL_RANGE.1
                    ),
                )),
                None => Ok(()),
            }
        };
        if let Some(m) = mass {
            in_range("particle.mass", &m)?;
        }
        in_range(
            "particle.diffusion",
            &[diffusion.0[0][0], diffusion.0[1][1]],
        )?;
        let (surface, label) = self.surface(&sec, &units)?;
        let domain = surface.surface().domain();
        let point = |key: &str, v: &Option<Vec<f64>>| -> Result<Option<Point>, ScenarioError> {
            match v.as_deref() {
                None => Ok(None),
                Some([x, y]) if domain.contains([*x, *y]) => Ok(Some([*x, *y])),
                Some([x, y]) => Err(self.err(
                    key,
                    format!(
                        "({x}, {y}) lies outside the box [{}, {}] x [{}, {}]",
                        domain.x.0, domain.x.1, domain.y.0, domain.y.1
                    ),
                )),
                Some(v) => Err(self.err(
                    key,
                    format!("must be [x, y], two numbers; got {} values", v.len()),
                )),
            }
        };
        let start = point("states.start", &pf.states.start)?;
        let target = point("states.target", &pf.states.target)?;
        let product_radius = self.positive("states.product_radius", pf.states.product_radius)?;
        Ok(PlaneModel {
            source: self.file.to_string(),
            title: pf.title,
            system: PlaneSystem {
                surface,
                diffusion,
                mass,
                friction,
                start,
                target,
                product_radius,
                temperature_k: units.temperature,
            },
            units,
            surface_label: label,
            notes: pf
                .simulation
                .iter()
                .map(|_| {
                    format!(
                        "{}: [simulation] is not read for two-coordinate scenarios yet (survey and rate do not simulate)",
                        self.file
                    )
                })
                .collect(),
        })
    }

    /// D from particle.diffusion, or kT/(m_i γ) from particle.mass and particle.friction.
    fn plane_diffusion(
        &self,
        p: &PlaneParticleSection,
        mass: Option<[f64; 2]>,
        friction: Option<f64>,
    ) -> Result<DiffusionTensor, ScenarioError> {
        const KEY: &str = "particle.diffusion";
        match (&p.diffusion, friction, mass) {
            (Some(_), Some(_), _) => Err(self.err(
                KEY,
                "give particle.friction or particle.diffusion, not both (D = kT/(m gamma))",
            )),
            (None, Some(_), None) => Err(self.err(
                "particle.mass",
                "is required with particle.friction (D = kT/(m gamma))",
            )),
            (None, Some(g), Some(m)) => Ok(DiffusionTensor::diagonal(
                1.0 / (m[0] * g),
                1.0 / (m[1] * g),
            )),
            (None, None, _) => {
                Err(self.err(KEY, "is required (or particle.mass with particle.friction)"))
            }
            (Some(s), None, _) => {
                let d = match *s {
                    Shape::Scalar(v) => DiffusionTensor::scalar(v),
                    Shape::Pair([a, b]) => DiffusionTensor::diagonal(a, b),
                    Shape::Matrix(m) => DiffusionTensor(m),
                };
                let finite = d.0.iter().flatten().all(|v| v.is_finite());
                if !(finite && d.is_positive_definite()) {
                    return Err(self.err(
                        KEY,
                        format!(
                            "must be symmetric positive definite (positive numbers on the diagonal, Dxy = Dyx, Dxx Dyy > Dxy^2), got {:?}",
                            d.0
                        ),
                    ));
                }
                Ok(d)
            }
        }
    }

    /// One `[lo, hi]` box side.
    fn side(&self, key: &str, v: Option<&[f64]>) -> Result<Option<(f64, f64)>, ScenarioError> {
        match v {
            None => Ok(None),
            Some(&[a, b]) if a.is_finite() && b.is_finite() && a < b => Ok(Some((a, b))),
            Some(&[a, b]) => Err(self.err(
                key,
                format!("must be [lo, hi] with finite lo < hi, got [{a}, {b}]"),
            )),
            Some(v) => Err(self.err(
                key,
                format!("must be [lo, hi], two numbers; got {} values", v.len()),
            )),
        }
    }

    /// `[surface]`: exactly one of expr, table, family, with its box.
    fn surface(
        &self,
        sec: &SurfaceSection,
        units: &UnitSystem,
    ) -> Result<(PlaneSurface, String), ScenarioError> {
        let given = [
            sec.expr.is_some(),
            sec.table.is_some(),
            sec.family.is_some(),
        ]
        .iter()
        .filter(|&&b| b)
        .count();
        if given != 1 {
            return Err(self.err(
                "surface",
                "give exactly one of surface.expr, surface.table, surface.family",
            ));
        }
        let scale = 1.0 / units.kt_in_energy_unit;
        let x = self.side("surface.x", sec.x.as_deref())?;
        let y = self.side("surface.y", sec.y.as_deref())?;
        if sec.constants.is_some() && sec.expr.is_none() {
            return Err(self.err(
                "surface.constants",
                "only surface.expr uses constants: drop [surface.constants]",
            ));
        }
        if sec.scale.is_some() && sec.family.is_none() {
            return Err(self.err(
                "surface.scale",
                "applies to surface.family only (expr and table energies are in units.energy)",
            ));
        }
        if let Some(src) = &sec.expr {
            let constants = sec.constants.clone().unwrap_or_default();
            for (k, v) in &constants {
                if !v.is_finite() {
                    return Err(self.err(&format!("surface.constants.{k}"), "must be finite"));
                }
            }
            let (Some(x), Some(y)) = (x, y) else {
                let key = if x.is_none() {
                    "surface.x"
                } else {
                    "surface.y"
                };
                return Err(self.err(key, "is required with surface.expr (the box, [lo, hi])"));
            };
            let f = Formula2::parse(src, ["x", "y"], &constants)
                .map_err(|e| self.err("surface.expr", e.to_string()))?;
            let s = FormulaSurface::new(f, scale, Rect { x, y });
            return Ok((PlaneSurface::Formula(s), format!("U(x, y) = {src}")));
        }
        if let Some(t) = &sec.table {
            if x.is_some() || y.is_some() {
                let key = if x.is_some() {
                    "surface.x"
                } else {
                    "surface.y"
                };
                return Err(self.err(
                    key,
                    "a table's box is its grid: drop surface.x and surface.y",
                ));
            }
            let path = self.base.join(t);
            let shown = path.display().to_string();
            let bytes = std::fs::read(&path)
                .map_err(|e| self.err("surface.table", format!("cannot read {shown}: {e}")))?;
            let g = GridSurface::from_bytes(&bytes, scale).map_err(|e| ScenarioError::Key {
                file: shown.clone(),
                key: "surface.table".into(),
                message: e.to_string(),
            })?;
            let label = format!("grid table {t} ({} x {} nodes)", g.xs().len(), g.ys().len());
            return Ok((PlaneSurface::Grid(g), label));
        }
        let name = sec.family.as_deref().unwrap_or_default();
        if name != "muller-brown" {
            return Err(self.err(
                "surface.family",
                format!("unknown surface family {name:?} (known: {SURFACE_FAMILIES})"),
            ));
        }
        let unit = match sec.scale {
            None => 1.0,
            Some(v) if v.is_finite() && v > 0.0 => v,
            Some(v) => {
                return Err(self.err(
                    "surface.scale",
                    format!("must be a positive energy, got {v}"),
                ));
            }
        };
        let mut s = MullerBrown::new(unit * scale);
        s.domain = Rect {
            x: x.unwrap_or(s.domain.x),
            y: y.unwrap_or(s.domain.y),
        };
        let label = format!("Müller–Brown, one unit = {unit} {}", units.names.energy);
        Ok((PlaneSurface::MullerBrown(s), label))
    }
}
