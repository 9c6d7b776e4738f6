//! The `[potential]` section: a formula, a built-in family or a profile table, its domain, and
//! the options of a table's fit.

use super::ScenarioError;
use super::Validator;
use super::file::PotentialSection;
use crate::potential::smooth::Rule as SmoothRule;
use crate::potential::table::read_columns;
use crate::potential::{
    AnyPotential, Family, FitChoice, Formula, FormulaPotential, Table, TableOptions,
};
use crate::units::UnitSystem;
use std::collections::BTreeMap;
use std::path::PathBuf;

impl Validator<'_> {
    pub(super) fn domain(
        &self,
        pot: &PotentialSection,
    ) -> Result<Option<(f64, f64)>, ScenarioError> {
        let Some(v) = pot.domain.as_deref() else {
            return Ok(None);
        };
        match *v {
            [a, b] if a.is_finite() && b.is_finite() && a < b => Ok(Some((a, b))),
            [a, b] => Err(self.err(
                "potential.domain",
                format!("must be [lo, hi] with finite lo < hi, got [{a}, {b}]"),
            )),
            _ => Err(self.err(
                "potential.domain",
                format!("must be [lo, hi], two numbers; got {} values", v.len()),
            )),
        }
    }

    /// The fit and significance options of a table potential (energies scaled to kT).
    pub(super) fn table_options(
        &self,
        pot: &PotentialSection,
        cols: &crate::potential::table::Columns,
        scale: f64,
        correlation_length: Option<f64>,
    ) -> Result<TableOptions, ScenarioError> {
        let noise = self.positive("potential.noise", pot.noise)?;
        if noise.is_some() && cols.sigma_u.is_some() {
            return Err(self.err(
                "potential.noise",
                "the table has a sigma_U column: drop potential.noise",
            ));
        }
        let noisy = noise.is_some()
            || cols
                .sigma_u
                .as_ref()
                .is_some_and(|s| s.iter().any(|&v| v > 0.0));
        let fit = match pot.fit.as_deref() {
            None => None,
            Some("interpolate") => Some(FitChoice::Interpolate),
            Some(rule @ ("unbiased-risk" | "chi-square" | "cross-validation")) => {
                if !noisy {
                    return Err(self.err(
                        "potential.fit",
                        "smoothing needs the rows' standard errors: a sigma_U column or potential.noise",
                    ));
                }
                Some(FitChoice::Smooth(match rule {
                    "chi-square" => SmoothRule::ChiSquare,
                    "cross-validation" => SmoothRule::CrossValidation,
                    _ => SmoothRule::Risk {
                        correlation_length: correlation_length
                            .unwrap_or_else(|| crate::potential::table::median_spacing(&cols.x)),
                    },
                }))
            }
            Some(other) => {
                return Err(self.err(
                    "potential.fit",
                    format!(
                        "unknown fit {other:?} (unbiased-risk, chi-square, cross-validation, interpolate)"
                    ),
                ));
            }
        };
        let prominence = match pot.prominence {
            Some(p) if p.is_finite() && p >= 0.0 => Some(p * scale),
            Some(p) => {
                return Err(self.err(
                    "potential.prominence",
                    format!("must be a finite energy >= 0, got {p}"),
                ));
            }
            None => None,
        };
        Ok(TableOptions {
            noise: noise.map(|n| n * scale),
            fit,
            correlation_length,
            prominence,
        })
    }

    #[allow(clippy::type_complexity)] // (potential, label, optional D column) is used once
    pub(super) fn potential(
        &self,
        pot: &PotentialSection,
        units: &UnitSystem,
        constants: &BTreeMap<String, f64>,
        correlation_length: Option<f64>,
    ) -> Result<(AnyPotential, String, Option<crate::potential::Spline>), ScenarioError> {
        let given = [
            pot.expr.is_some(),
            pot.table.is_some(),
            pot.family.is_some(),
        ]
        .iter()
        .filter(|&&b| b)
        .count();
        if given != 1 {
            return Err(self.err(
                "potential",
                format!("give exactly one of expr, table or family ({given} given)"),
            ));
        }
        let scale = 1.0 / units.kt_in_energy_unit;
        let family_keys: [(&str, Option<f64>); 6] = [
            ("barrier", pot.barrier),
            ("half_width", pot.half_width),
            ("width", pot.width),
            ("amplitude", pot.amplitude),
            ("period", pot.period),
            ("tilt", pot.tilt),
        ];
        let only = |allowed: &[&str], what: &str| -> Result<(), ScenarioError> {
            for (k, v) in family_keys {
                if v.is_some() && !allowed.contains(&k) {
                    return Err(self.err(
                        &format!("potential.{k}"),
                        format!("is not a parameter of {what}"),
                    ));
                }
            }
            Ok(())
        };
        let domain = self.domain(pot)?;
        if pot.table.is_none() {
            for (key, given) in [
                ("noise", pot.noise.is_some()),
                ("fit", pot.fit.is_some()),
                ("prominence", pot.prominence.is_some()),
            ] {
                if given {
                    return Err(self.err(
                        &format!("potential.{key}"),
                        "applies to table potentials only (a formula or family is exact)",
                    ));
                }
            }
        }
        if let Some(src) = &pot.expr {
            only(&[], "a formula potential (use potential.constants)")?;
            let f = Formula::parse(src, constants)
                .map_err(|e| self.err("potential.expr", e.to_string()))?;
            let (lo, hi) = domain
                .ok_or_else(|| self.err("potential.domain", "is required with potential.expr"))?;
            return Ok((
                AnyPotential::Formula(FormulaPotential::new(f, scale, (lo, hi))),
                format!("U(x) = {src}"),
                None,
            ));
        }
        if let Some(t) = &pot.table {
            only(&[], "a table potential")?;
            if pot.domain.is_some() {
                return Err(self.err(
                    "potential.domain",
                    "a table's domain is its x range: drop potential.domain",
                ));
            }
            let path: PathBuf = self.base.join(t);
            let shown = path.display().to_string();
            let bytes = std::fs::read(&path)
                .map_err(|e| self.err("potential.table", format!("cannot read {shown}: {e}")))?;
            let cols = read_columns(&bytes).map_err(|e| ScenarioError::Key {
                file: shown.clone(),
                key: "potential.table".into(),
                message: e.to_string(),
            })?;
            let opts = self.table_options(pot, &cols, scale, correlation_length)?;
            let table = Table::with_options(&cols, scale, opts);
            let d = table.diffusion().cloned();
            return Ok((
                AnyPotential::Table(table),
                format!("table {t} ({} rows)", cols.x.len()),
                d,
            ));
        }
        let name = pot.family.as_deref().unwrap_or_default();
        let fam = match name {
            "double-well" => {
                only(&["barrier", "half_width"], "the double-well family")?;
                let eb = self.require("potential.barrier", pot.barrier)? * scale;
                let a = self.require("potential.half_width", pot.half_width)?;
                Family::DoubleWell {
                    eb,
                    a,
                    domain: domain.unwrap_or((-3.0 * a, 3.0 * a)),
                }
            }
            "cubic" => {
                only(&["barrier", "width"], "the cubic family")?;
                let eb = self.require("potential.barrier", pot.barrier)? * scale;
                let w = self.require("potential.width", pot.width)?;
                let l = 1.5 * w;
                Family::Cubic {
                    eb,
                    l,
                    domain: domain.unwrap_or((-l, cubic_far_end(eb) * l)),
                }
            }
            "washboard" => {
                only(&["amplitude", "period", "tilt"], "the washboard family")?;
                let amp = self.require("potential.amplitude", pot.amplitude)? * scale;
                let period = self.require("potential.period", pot.period)?;
                let tilt = pot.tilt.unwrap_or(0.0);
                if !tilt.is_finite() {
                    return Err(self.err("potential.tilt", "must be finite"));
                }
                Family::Washboard {
                    amp,
                    period,
                    tilt: tilt * scale,
                    // walls at the barrier tops next to the well at 0, and a whole period on the
                    // downhill side (mirrored for a leftward tilt), where the product well is
                    domain: domain.unwrap_or(if tilt < 0.0 {
                        (-1.5 * period, 0.5 * period)
                    } else {
                        (-0.5 * period, 1.5 * period)
                    }),
                }
            }
            other => {
                return Err(self.err(
                    "potential.family",
                    format!("unknown family {other:?} (double-well, cubic, washboard)"),
                ));
            }
        };
        Ok((AnyPotential::Family(fam), format!("{name} family"), None))
    }
}

/// Far end (in units of L) of the default cubic domain: where U has dropped 12 kT below the
/// barrier top (2 kT past the default target), and at least s = 2.
fn cubic_far_end(eb: f64) -> f64 {
    // drop(s) = eb + 6.75 eb s^2 (s - 1) grows monotonically for s > 1
    let drop = |s: f64| eb + 6.75 * eb * s * s * (s - 1.0);
    let (mut lo, mut hi) = (1.0, 2.0);
    while drop(hi) < 12.0 + eb {
        hi *= 2.0;
    }
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        if drop(mid) < 12.0 + eb {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    hi.max(2.0)
}

/// D(x) must be finite and positive on a fine grid over the domain.
pub(super) fn check_positive_on(f: &Formula, lo: f64, hi: f64) -> Result<(), String> {
    let n = 2000;
    for i in 0..=n {
        let x = lo + (hi - lo) * f64::from(i) / f64::from(n);
        let v = f.value(x);
        if !(v.is_finite() && v > 0.0) {
            return Err(format!(
                "D({x}) = {v}: D(x) must be finite and positive on the domain"
            ));
        }
    }
    Ok(())
}
