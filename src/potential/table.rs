//! Profile tables: reading a file of x, U (and optionally σ_U and D) rows, and the cubic spline
//! that makes U' and U'' exist: the interpolating not-a-knot spline for exact tables, the weighted
//! smoothing spline ([`super::smooth`]) for noisy ones.
//!
//! Which curve. A table whose rows carry standard errors (a sigma_U column, or a uniform noise level
//! set in the scenario) is fitted, not interpolated: interpolation would pass through every noise
//! wiggle and hand its curvature to the harmonic rates and its bumps to the landscape as spurious
//! minima and maxima. An exact table (no σ) is interpolated as before. The fit keeps the raw rows
//! ([`Table::knot_u`]) so that profile-uncertainty draws perturb the data, not the fit, and refit
//! them with the central fit's smoothing parameter ([`Table::with_knot_u`]).
//!
//! Significance of stationary points ([`Potential::prominence_threshold`]): on a noisy table a
//! minimum–maximum pair whose energy difference is below max([`PROMINENCE_SIGMAS`] σ_U,
//! [`PROMINENCE_FLOOR_KT`] kT) is not told apart from noise and is dropped by the landscape
//! analysis; `potential.prominence` sets the threshold for any table.
//!
//! Spline: C² piecewise cubic through every row with the not-a-knot end conditions (the third
//! derivative is continuous across the second and the second-to-last knots; de Boor, A Practical
//! Guide to Splines, ch. IV), which keeps O(h⁴) accuracy up to the ends where a natural spline
//! would force U'' = 0. Outside the table the potential continues as its first-order Taylor
//! expansion plus a steep harmonic wall, `U = U_end + U'_end d + K d²/2`, with K chosen so the wall
//! rises [`WALL_RISE_KT`] over [`WALL_WIDTH_FRACTION`] of the table's span: dynamics that overshoot
//! the end are pushed straight back (a reflecting end), while analytic results treat the ends as
//! exact reflecting boundaries.

use super::Potential;
use super::smooth::{self, Rule};
use serde::Serialize;
use thiserror::Error;

/// Wall height (kT) reached at a distance [`WALL_WIDTH_FRACTION`]·span outside the table.
pub const WALL_RISE_KT: f64 = 20.0;
/// Wall width as a fraction of the table span.
pub const WALL_WIDTH_FRACTION: f64 = 0.01;
/// Fewest rows a table may have: a not-a-knot spline needs four points.
pub const MIN_ROWS: usize = 4;
/// Default significance threshold of a stationary point on a noisy table, in units of the σ_U of
/// its rows. The difference of two fitted values carries up to sqrt(2) σ of noise (correlated
/// noise is hardly smoothed away), so 4σ is 2.8 standard deviations of a difference: a one-sided
/// chance of 0.2% per pair, which keeps a plateau of many candidate pairs clean (3σ let one of
/// sixteen noisy example tables keep a 0.92 kT noise well at σ = 0.3 kT).
pub const PROMINENCE_SIGMAS: f64 = 4.0;
/// The threshold never drops below half a kT on a noisy table: a well or barrier shallower than
/// that holds no population and delays nothing, kinetically it is not a state.
pub const PROMINENCE_FLOOR_KT: f64 = 0.5;
/// Rows with σ_U = 0 in a noisy table count as very precise (σ floored at this fraction of the
/// largest σ), so the weighted fit stays defined.
const SIGMA_FLOOR_FRACTION: f64 = 1e-3;

/// How a table's rows become the curve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FitChoice {
    /// the interpolating not-a-knot spline (exact tables)
    Interpolate,
    /// the weighted smoothing spline with the given rule for its smoothing
    Smooth(Rule),
}

/// Options of a table potential beyond its columns (all energies in kT).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct TableOptions {
    /// a uniform σ_U for a table without that column
    pub noise: Option<f64>,
    /// the fit; default: smoothing by the unbiased risk when σ_U is known, interpolation otherwise
    pub fit: Option<FitChoice>,
    /// correlation length of the rows' noise (length unit); default: the median row spacing
    pub correlation_length: Option<f64>,
    /// the significance threshold of stationary points (kT); default as in the module doc
    pub prominence: Option<f64>,
}

/// What the fit did, for the report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitSummary {
    /// "interpolating spline" | "smoothing spline"
    pub method: &'static str,
    /// how the smoothing was chosen ("chi-square" | "cross-validation"), for a smoothing spline
    pub rule: Option<&'static str>,
    /// rows of the table
    pub rows: usize,
    /// Σ (U_i − fit_i)²/σ_i² (a smoothing spline)
    pub chi2: Option<f64>,
    /// effective degrees of freedom of the fit (rows for interpolation, 2 for a straight line)
    pub effective_dof: f64,
    /// where σ_U came from: "column" | "potential.noise"
    pub noise_source: Option<&'static str>,
    /// the smoothing parameter α (energy⁻²·length³ in kT units; null for interpolation or a line)
    pub smoothing: Option<f64>,
}

/// A problem in a table file, with the 1-based line number where it applies.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum TableError {
    /// A problem on one line.
    #[error("line {line}: {message}")]
    Line {
        /// 1-based line number
        line: usize,
        /// what is wrong
        message: String,
    },
    /// A problem with the file as a whole.
    #[error("{0}")]
    Whole(String),
}

pub(super) fn line_err(line: usize, message: impl Into<String>) -> TableError {
    TableError::Line {
        line,
        message: message.into(),
    }
}

/// The columns of a table, as read (in the file's units).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Columns {
    /// positions, strictly increasing
    pub x: Vec<f64>,
    /// U values
    pub u: Vec<f64>,
    /// standard errors of U, if given
    pub sigma_u: Option<Vec<f64>>,
    /// diffusion coefficients, if given
    pub d: Option<Vec<f64>>,
    /// standard errors of D, if given (with a D column)
    pub sigma_d: Option<Vec<f64>>,
}

#[derive(Clone, Copy, PartialEq)]
enum Col {
    X,
    U,
    Sigma,
    D,
    SigmaD,
}

fn header_name(s: &str) -> Option<Col> {
    match s.to_ascii_lowercase().as_str() {
        "x" => Some(Col::X),
        "u" | "f" | "energy" => Some(Col::U),
        "sigma_u" | "sigma" | "u_err" | "stderr" => Some(Col::Sigma),
        "d" | "diffusion" => Some(Col::D),
        "sigma_d" | "d_err" => Some(Col::SigmaD),
        _ => None,
    }
}

/// The text of a table file, or the 1-based line holding its first byte that is not UTF-8.
pub(super) fn utf8_text(bytes: &[u8]) -> Result<&str, usize> {
    std::str::from_utf8(bytes).map_err(|e| {
        bytes[..e.valid_up_to()]
            .iter()
            .filter(|&&b| b == b'\n')
            .count()
            + 1
    })
}

/// The columns a header line names (each once), through `name`; `expected` lists the names for
/// the message.
pub(super) fn header_columns<C: Copy + PartialEq>(
    fields: &[&str],
    name: impl Fn(&str) -> Option<C>,
    expected: &str,
) -> Result<Vec<C>, String> {
    let mut named = Vec::new();
    for f in fields {
        match name(f) {
            Some(c) if !named.contains(&c) => named.push(c),
            Some(_) => return Err(format!("column \"{f}\" twice")),
            None => {
                return Err(format!(
                    "unknown column {f:?} in the header (expected {expected}, separated by commas or whitespace)"
                ));
            }
        }
    }
    Ok(named)
}

/// Each data line (not empty, not a `#` comment): its 1-based number, fields and the fields read
/// as numbers.
pub(super) fn data_lines(text: &str) -> impl Iterator<Item = (usize, Vec<&str>, Vec<Option<f64>>)> {
    text.lines().enumerate().filter_map(|(i, raw)| {
        let line = raw.trim();
        if line.is_empty() || line.starts_with('#') {
            return None;
        }
        let fields = split_fields(line);
        let numbers = fields.iter().map(|f| f.parse::<f64>().ok()).collect();
        Some((i + 1, fields, numbers))
    })
}

fn split_fields(line: &str) -> Vec<&str> {
    if line.contains(',') {
        line.split(',').map(str::trim).collect()
    } else {
        line.split_whitespace().collect()
    }
}

/// Reads table text. Columns: by header names (x, U, sigma_U, D, sigma_D) when the first data
/// line is a header, else by count: 2 = x,U; 3 = x,U,sigma_U; 4 = x,U,sigma_U,D;
/// 5 = x,U,sigma_U,D,sigma_D.
///
/// # Errors
/// Non-UTF-8 bytes, non-numeric fields, NaN or infinite values, rows out of order or with duplicate
/// x, ragged rows, negative σ_U or σ_D, non-positive D, σ_D without D, fewer than [`MIN_ROWS`]
/// rows; each with its line.
pub fn read_columns(bytes: &[u8]) -> Result<Columns, TableError> {
    let text = utf8_text(bytes).map_err(|line| line_err(line, "the file is not UTF-8 text"))?;
    let mut layout: Option<Vec<Col>> = None;
    let mut cols = Columns::default();
    let mut sigma = Vec::new();
    let mut dcol = Vec::new();
    let mut sigma_d = Vec::new();
    for (line_no, fields, numbers) in data_lines(text) {
        if layout.is_none() {
            if numbers.iter().all(Option::is_none) {
                // a header line (no field is a number)
                let named = header_columns(&fields, header_name, "x, U, sigma_U, D, sigma_D")
                    .map_err(|m| line_err(line_no, m))?;
                if !(named.contains(&Col::X) && named.contains(&Col::U)) {
                    return Err(line_err(line_no, "the header must name columns x and U"));
                }
                if named.contains(&Col::SigmaD) && !named.contains(&Col::D) {
                    return Err(line_err(line_no, "a sigma_D column needs a D column"));
                }
                layout = Some(named);
                continue;
            }
            layout = Some(match fields.len() {
                0 | 1 => {
                    return Err(line_err(
                        line_no,
                        "one column only: a profile needs at least x and U",
                    ));
                }
                2 => vec![Col::X, Col::U],
                3 => vec![Col::X, Col::U, Col::Sigma],
                4 => vec![Col::X, Col::U, Col::Sigma, Col::D],
                5 => vec![Col::X, Col::U, Col::Sigma, Col::D, Col::SigmaD],
                n => {
                    return Err(line_err(
                        line_no,
                        format!(
                            "{n} columns without a header (expected 2 to 5: x, U, sigma_U, D, sigma_D)"
                        ),
                    ));
                }
            });
        }
        let lay = layout.as_ref().expect("layout set above");
        if fields.len() != lay.len() {
            return Err(line_err(
                line_no,
                format!("{} fields, expected {}", fields.len(), lay.len()),
            ));
        }
        let mut x = 0.0;
        for (k, (&col, v)) in lay.iter().zip(&numbers).enumerate() {
            let v = match v {
                Some(v) if v.is_finite() => *v,
                Some(_) => {
                    return Err(line_err(
                        line_no,
                        format!("field {} is \"{}\" (NaN or infinite)", k + 1, fields[k]),
                    ));
                }
                None => {
                    return Err(line_err(
                        line_no,
                        format!("field {} \"{}\" is not a number", k + 1, fields[k]),
                    ));
                }
            };
            match col {
                Col::X => x = v,
                Col::U => cols.u.push(v),
                Col::Sigma => {
                    if v < 0.0 {
                        return Err(line_err(line_no, "sigma_U is negative"));
                    }
                    sigma.push(v);
                }
                Col::D => {
                    if v <= 0.0 {
                        return Err(line_err(line_no, "D must be positive"));
                    }
                    dcol.push(v);
                }
                Col::SigmaD => {
                    if v < 0.0 {
                        return Err(line_err(line_no, "sigma_D is negative"));
                    }
                    sigma_d.push(v);
                }
            }
        }
        if let Some(&prev) = cols.x.last() {
            if x == prev {
                return Err(line_err(line_no, format!("duplicate x = {x}")));
            }
            if x < prev {
                return Err(line_err(
                    line_no,
                    format!(
                        "x = {x} is smaller than the previous row's {prev}: rows must be sorted by increasing x"
                    ),
                ));
            }
        }
        cols.x.push(x);
    }
    if cols.x.len() < MIN_ROWS {
        return Err(TableError::Whole(format!(
            "{} data rows; a cubic spline needs at least {MIN_ROWS}",
            cols.x.len()
        )));
    }
    let lay = layout.unwrap_or_default();
    if lay.contains(&Col::Sigma) {
        cols.sigma_u = Some(sigma);
    }
    if lay.contains(&Col::D) {
        cols.d = Some(dcol);
    }
    if lay.contains(&Col::SigmaD) {
        cols.sigma_d = Some(sigma_d);
    }
    Ok(cols)
}

/// A C² cubic spline with not-a-knot ends; coefficients per interval in powers of (x − x_i).
#[derive(Debug, Clone)]
pub struct Spline {
    x: Vec<f64>,
    c: Vec<[f64; 4]>,
    /// spacing when the knots are uniform (index by division instead of bisection)
    uniform: Option<f64>,
}

impl Spline {
    /// Builds the spline; `x` strictly increasing, at least [`MIN_ROWS`] points (checked by the reader).
    pub fn new(x: &[f64], y: &[f64]) -> Self {
        let n = x.len();
        assert!(n >= MIN_ROWS && y.len() == n, "spline needs >= 4 points");
        let h: Vec<f64> = x.windows(2).map(|w| w[1] - w[0]).collect();
        let s: Vec<f64> = (0..n - 1).map(|i| (y[i + 1] - y[i]) / h[i]).collect();
        // Tridiagonal system for the second derivatives M_1..M_{n-2}; M_0 and M_{n-1} eliminated by
        // the not-a-knot conditions M_0 = ((h0+h1)M_1 - h0 M_2)/h1 and its mirror image.
        let m = n - 2;
        let mut sub = vec![0.0; m];
        let mut diag = vec![0.0; m];
        let mut sup = vec![0.0; m];
        let mut rhs = vec![0.0; m];
        for k in 0..m {
            let i = k + 1;
            sub[k] = h[i - 1];
            diag[k] = 2.0 * (h[i - 1] + h[i]);
            sup[k] = h[i];
            rhs[k] = 6.0 * (s[i] - s[i - 1]);
        }
        let (h0, h1) = (h[0], h[1]);
        diag[0] += h0 * (h0 + h1) / h1;
        sup[0] -= h0 * h0 / h1;
        let (ha, hb) = (h[n - 3], h[n - 2]);
        diag[m - 1] += hb * (ha + hb) / ha;
        sub[m - 1] -= hb * hb / ha;
        // Thomas algorithm
        for k in 1..m {
            let w = sub[k] / diag[k - 1];
            diag[k] -= w * sup[k - 1];
            rhs[k] -= w * rhs[k - 1];
        }
        let mut mm = vec![0.0; n];
        mm[m] = rhs[m - 1] / diag[m - 1];
        for k in (0..m - 1).rev() {
            mm[k + 1] = (rhs[k] - sup[k] * mm[k + 2]) / diag[k];
        }
        mm[0] = ((h0 + h1) * mm[1] - h0 * mm[2]) / h1;
        mm[n - 1] = ((ha + hb) * mm[n - 2] - hb * mm[n - 3]) / ha;
        Self::from_curvatures(x, y, &mm)
    }

    /// The C² cubic spline with values `y` and second derivatives `mm` at the knots `x` (used for
    /// the smoothing spline, whose second derivatives come from its own system).
    pub fn from_curvatures(x: &[f64], y: &[f64], mm: &[f64]) -> Self {
        let n = x.len();
        let h: Vec<f64> = x.windows(2).map(|w| w[1] - w[0]).collect();
        let s: Vec<f64> = (0..n - 1).map(|i| (y[i + 1] - y[i]) / h[i]).collect();
        let c = (0..n - 1)
            .map(|i| {
                let hi = h[i];
                [
                    y[i],
                    s[i] - hi * (2.0 * mm[i] + mm[i + 1]) / 6.0,
                    mm[i] / 2.0,
                    (mm[i + 1] - mm[i]) / (6.0 * hi),
                ]
            })
            .collect();
        let span = x[n - 1] - x[0];
        let step = span / (n - 1) as f64;
        // Uniform if every knot sits within 1e-9 spacings of the uniform grid (then the index from
        // division is right, and the bracket check below catches rounding at the knots).
        let uniform = x
            .iter()
            .enumerate()
            .all(|(i, &xi)| (xi - (x[0] + step * i as f64)).abs() <= 1e-9 * step)
            .then_some(step);
        Self {
            x: x.to_vec(),
            c,
            uniform,
        }
    }

    /// The knots.
    pub fn knots(&self) -> &[f64] {
        &self.x
    }

    /// Index of the interval containing x (clamped to the first/last interval).
    #[inline]
    pub fn interval(&self, x: f64) -> usize {
        let last = self.c.len() - 1;
        match self.uniform {
            Some(step) => {
                let k = ((x - self.x[0]) / step).floor();
                if k <= 0.0 {
                    0
                } else {
                    let k = (k as usize).min(last);
                    // rounding can put x just left of knot k
                    if x < self.x[k] { k - 1 } else { k }
                }
            }
            None => self.x[1..last + 1].partition_point(|&k| k <= x),
        }
    }

    #[inline]
    fn local(&self, x: f64) -> (&[f64; 4], f64) {
        let i = self.interval(x);
        (&self.c[i], x - self.x[i])
    }

    /// S(x) (cubic continuation outside the knots)
    #[inline]
    pub fn value(&self, x: f64) -> f64 {
        let (c, t) = self.local(x);
        c[0] + t * (c[1] + t * (c[2] + t * c[3]))
    }
    /// S'(x)
    #[inline]
    pub fn d1(&self, x: f64) -> f64 {
        let (c, t) = self.local(x);
        c[1] + t * (2.0 * c[2] + 3.0 * t * c[3])
    }
    /// S''(x)
    #[inline]
    pub fn d2(&self, x: f64) -> f64 {
        let (c, t) = self.local(x);
        2.0 * c[2] + 6.0 * t * c[3]
    }

    /// All roots of S' inside the knot range (S' is quadratic on each interval).
    pub fn derivative_roots(&self) -> Vec<f64> {
        let mut out: Vec<f64> = Vec::new();
        for (i, c) in self.c.iter().enumerate() {
            let (x0, h) = (self.x[i], self.x[i + 1] - self.x[i]);
            // S'(t) = c1 + 2 c2 t + 3 c3 t^2 on [0, h]
            let (a, b, cc) = (3.0 * c[3], 2.0 * c[2], c[1]);
            let mut roots = [f64::NAN; 2];
            if a.abs() <= 1e-14 * (b.abs() + cc.abs() / h) / h {
                if b != 0.0 {
                    roots[0] = -cc / b;
                }
            } else {
                let disc = b * b - 4.0 * a * cc;
                if disc >= 0.0 {
                    // numerically stable quadratic roots
                    let q = -0.5 * (b + b.signum() * disc.sqrt());
                    roots[0] = q / a;
                    if q != 0.0 {
                        roots[1] = cc / q;
                    }
                }
            }
            // A root at a knot may land a rounding error outside both neighbouring intervals:
            // accept 1e-9 spacings of slack and merge near-duplicates below.
            let slack = 1e-9 * h;
            for t in roots {
                if t.is_finite() && t >= -slack && t <= h + slack {
                    out.push(x0 + t.clamp(0.0, h));
                }
            }
        }
        out.sort_by(f64::total_cmp);
        let tiny = 1e-9 * (self.x[self.x.len() - 1] - self.x[0]) / self.c.len() as f64;
        out.dedup_by(|a, b| (*a - *b).abs() <= tiny);
        out
    }
}

/// The median row spacing (the default correlation length of a profile's noise, for the fit and
/// for the uncertainty draws alike): the middle spacing, or the mean of the two middle ones.
pub fn median_spacing(x: &[f64]) -> f64 {
    let mut h: Vec<f64> = x.windows(2).map(|w| w[1] - w[0]).collect();
    h.sort_by(f64::total_cmp);
    let m = h.len();
    if m % 2 == 1 {
        h[m / 2]
    } else {
        0.5 * (h[m / 2 - 1] + h[m / 2])
    }
}

/// A tabulated potential (U in kT) with an optional σ_U column (kT) and D column.
#[derive(Debug, Clone)]
pub struct Table {
    spline: Spline,
    /// U at the rows (kT) as read: the data the spline fits or interpolates
    u: Vec<f64>,
    sigma_u: Option<Vec<f64>>,
    diffusion: Option<Spline>,
    /// D at the rows and its standard errors, as read (length²/time)
    d_rows: Option<Vec<f64>>,
    sigma_d: Option<Vec<f64>>,
    wall_k: f64,
    lo: f64,
    hi: f64,
    fit: Box<FitSummary>,
    /// σ used by the fit (floored), when smoothing
    fit_sigma: Option<Vec<f64>>,
    /// the significance threshold: absolute (kT), or from σ_U
    prominence: Option<f64>,
}

impl Table {
    /// Builds the table potential from columns read in the scenario's units; `energy_scale` takes
    /// the file's energy unit to kT. Default options: a table with a sigma_U column is smoothed.
    pub fn new(cols: &Columns, energy_scale: f64) -> Self {
        Self::with_options(cols, energy_scale, TableOptions::default())
    }

    /// As [`Table::new`] with explicit options (energies in `opts` already in kT).
    ///
    /// # Panics
    /// If `opts.noise` is given although the columns carry σ_U (the scenario refuses that), or
    /// is not positive.
    pub fn with_options(cols: &Columns, energy_scale: f64, opts: TableOptions) -> Self {
        let u: Vec<f64> = cols.u.iter().map(|v| v * energy_scale).collect();
        let (sigma_u, noise_source) = match (&cols.sigma_u, opts.noise) {
            (Some(s), None) => (
                Some(s.iter().map(|v| v * energy_scale).collect::<Vec<_>>()),
                Some("column"),
            ),
            (None, Some(n)) => {
                assert!(n > 0.0, "noise level must be positive");
                (Some(vec![n; u.len()]), Some("potential.noise"))
            }
            (None, None) => (None, None),
            (Some(_), Some(_)) => panic!("noise level given beside a sigma_U column"),
        };
        let noisy = sigma_u.as_ref().is_some_and(|s| s.iter().any(|&v| v > 0.0));
        let choice = opts.fit.unwrap_or(if noisy {
            FitChoice::Smooth(Rule::Risk {
                correlation_length: opts
                    .correlation_length
                    .unwrap_or_else(|| median_spacing(&cols.x)),
            })
        } else {
            FitChoice::Interpolate
        });
        let lo = cols.x[0];
        let hi = *cols.x.last().expect("non-empty");
        let width = WALL_WIDTH_FRACTION * (hi - lo);
        let wall_k = 2.0 * WALL_RISE_KT / (width * width);
        let mut table = Self {
            spline: Spline::new(&cols.x, &u),
            u,
            sigma_u,
            diffusion: cols.d.as_ref().map(|d| Spline::new(&cols.x, d)),
            d_rows: cols.d.clone(),
            sigma_d: cols.sigma_d.clone(),
            wall_k,
            lo,
            hi,
            fit: Box::new(FitSummary {
                method: "interpolating spline",
                rule: None,
                rows: cols.x.len(),
                chi2: None,
                effective_dof: cols.x.len() as f64,
                noise_source,
                smoothing: None,
            }),
            fit_sigma: None,
            prominence: opts.prominence,
        };
        if let (FitChoice::Smooth(rule), true) = (choice, noisy) {
            let sig = table.sigma_u.as_ref().expect("noisy implies σ");
            let top = sig.iter().copied().fold(0.0, f64::max);
            let fs: Vec<f64> = sig
                .iter()
                .map(|&v| v.max(SIGMA_FLOOR_FRACTION * top))
                .collect();
            let sm = smooth::fit(&cols.x, &table.u, &fs, rule);
            table.spline = Spline::from_curvatures(&cols.x, &sm.values, &sm.curvatures);
            table.fit.method = "smoothing spline";
            table.fit.rule = Some(rule.name());
            table.fit.chi2 = Some(sm.chi2);
            table.fit.effective_dof = sm.edf;
            table.fit.smoothing = Some(sm.alpha).filter(|a| a.is_finite());
            table.fit_sigma = Some(fs);
        }
        table
    }

    /// The same table with U at the rows replaced by `u` (kT): same x, σ_U, D column, walls and
    /// fit; a smoothing spline is refitted with the central fit's smoothing parameter, so a draw
    /// differs from the central curve by its data only. Used to re-analyse a profile perturbed
    /// within its standard errors.
    ///
    /// # Panics
    /// If `u` does not have one value per knot (a programming error, not user input).
    pub fn with_knot_u(&self, u: &[f64]) -> Self {
        assert_eq!(u.len(), self.u.len(), "one U value per knot");
        let x = self.spline.knots();
        let (spline, fit) = match &self.fit_sigma {
            Some(fs) => {
                let alpha = self.fit.smoothing.unwrap_or(f64::INFINITY);
                let sm = smooth::fit_at(x, u, fs, alpha);
                let mut fit = self.fit.clone();
                fit.chi2 = Some(sm.chi2);
                fit.effective_dof = sm.edf;
                (Spline::from_curvatures(x, &sm.values, &sm.curvatures), fit)
            }
            None => (Spline::new(x, u), self.fit.clone()),
        };
        Self {
            spline,
            u: u.to_vec(),
            sigma_u: self.sigma_u.clone(),
            diffusion: self.diffusion.clone(),
            d_rows: self.d_rows.clone(),
            sigma_d: self.sigma_d.clone(),
            wall_k: self.wall_k,
            lo: self.lo,
            hi: self.hi,
            fit,
            fit_sigma: self.fit_sigma.clone(),
            prominence: self.prominence,
        }
    }
    /// U at the rows as read (kT): the data, not the fit.
    pub fn knot_u(&self) -> &[f64] {
        &self.u
    }
    /// The spline of U (the fit for a noisy table).
    pub fn spline(&self) -> &Spline {
        &self.spline
    }
    /// σ_U per row (kT), if given (a column, or the uniform noise level).
    pub fn sigma_u(&self) -> Option<&[f64]> {
        self.sigma_u.as_deref()
    }
    /// D at the rows as read, if the table has a D column.
    pub fn d_rows(&self) -> Option<&[f64]> {
        self.d_rows.as_deref()
    }
    /// σ_D per row, if the table has a sigma_D column.
    pub fn sigma_d(&self) -> Option<&[f64]> {
        self.sigma_d.as_deref()
    }
    /// The spline of the D column, if given.
    pub fn diffusion(&self) -> Option<&Spline> {
        self.diffusion.as_ref()
    }

    /// σ_U at x, linear between rows (kT); None for an exact table.
    fn sigma_at(&self, x: f64) -> Option<f64> {
        let s = self.sigma_u.as_ref()?;
        let xs = self.spline.knots();
        let i = self.spline.interval(x);
        let t = ((x - xs[i]) / (xs[i + 1] - xs[i])).clamp(0.0, 1.0);
        Some(s[i] + t * (s[i + 1] - s[i]))
    }

    #[inline]
    fn outside(&self, x: f64) -> Option<(f64, f64)> {
        if x < self.lo {
            Some((self.lo, x - self.lo))
        } else if x > self.hi {
            Some((self.hi, x - self.hi))
        } else {
            None
        }
    }
}

impl Potential for Table {
    #[inline]
    fn u(&self, x: f64) -> f64 {
        match self.outside(x) {
            None => self.spline.value(x),
            Some((e, d)) => {
                self.spline.value(e) + self.spline.d1(e) * d + 0.5 * self.wall_k * d * d
            }
        }
    }
    #[inline]
    fn du(&self, x: f64) -> f64 {
        match self.outside(x) {
            None => self.spline.d1(x),
            Some((e, d)) => self.spline.d1(e) + self.wall_k * d,
        }
    }
    #[inline]
    fn d2u(&self, x: f64) -> f64 {
        match self.outside(x) {
            None => self.spline.d2(x),
            Some(_) => self.wall_k,
        }
    }
    fn domain(&self) -> (f64, f64) {
        (self.lo, self.hi)
    }
    fn stationary_points(&self) -> Option<Vec<f64>> {
        Some(self.spline.derivative_roots())
    }
    fn knots(&self) -> Option<&[f64]> {
        Some(self.spline.knots())
    }
    fn is_interpolated(&self) -> bool {
        true
    }
    fn fit(&self) -> Option<&FitSummary> {
        Some(&self.fit)
    }
    fn prominence_threshold(&self, x: f64) -> f64 {
        if let Some(p) = self.prominence {
            return p;
        }
        // a threshold from σ_U only where the curve is a fit to noisy rows
        match (&self.fit_sigma, self.sigma_at(x)) {
            (Some(_), Some(s)) => (PROMINENCE_SIGMAS * s).max(PROMINENCE_FLOOR_KT),
            _ => 0.0,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // A not-a-knot spline reproduces any cubic exactly (de Boor, ch. IV): rounding only, so 1e-10.
    #[test]
    fn not_a_knot_reproduces_cubics() {
        let f = |x: f64| 2.0 - x + 0.5 * x * x - 0.3 * x * x * x;
        for xs in [
            vec![0.0, 0.5, 1.1, 1.6, 2.5, 3.0],
            vec![-1.0, 0.0, 1.0, 2.0],
            (0..50).map(|i| f64::from(i) * 0.1).collect(),
        ] {
            let ys: Vec<f64> = xs.iter().map(|&x| f(x)).collect();
            let s = Spline::new(&xs, &ys);
            for &x in &[0.05, 0.77, 1.3, 1.99, 2.9] {
                assert!((s.value(x) - f(x)).abs() < 1e-10);
                assert!((s.d1(x) - (-1.0 + x - 0.9 * x * x)).abs() < 1e-9);
                assert!((s.d2(x) - (1.0 - 1.8 * x)).abs() < 1e-8);
            }
        }
    }

    #[test]
    fn reader_accepts_comments_headers_and_separators() {
        let c = read_columns(b"# c\nx,U\n0,1\n1,0\n2,1\n3,4\n").unwrap();
        assert_eq!(c.x, vec![0.0, 1.0, 2.0, 3.0]);
        let c = read_columns(b"0 1 0.1\n1\t0 0.1\n2 1 0.2\n3 4 0.1\n").unwrap();
        assert_eq!(c.sigma_u.unwrap()[2], 0.2);
        let c = read_columns(b"U,x\n1,0\n0,1\n1,2\n4,3\n").unwrap();
        assert_eq!(c.u, vec![1.0, 0.0, 1.0, 4.0]);
    }

    #[test]
    fn reader_errors_name_the_line() {
        let cases: [(&[u8], usize); 7] = [
            (b"0,1\n1,0\n1,2\n3,4\n", 3),
            (b"0,1\n2,0\n1,2\n3,4\n", 3),
            (b"0,1\n1,nan\n2,1\n3,4\n", 2),
            (b"0,1\n1,abc\n2,1\n3,4\n", 2),
            (b"0,1\n1,0,3\n2,1\n3,4\n", 2),
            (b"0\n1\n2\n3\n", 1),
            (b"0,1\n1,\xff\n", 2),
        ];
        for (text, line) in cases {
            match read_columns(text) {
                Err(TableError::Line { line: l, .. }) => assert_eq!(l, line),
                other => panic!("{other:?}"),
            }
        }
        assert!(matches!(
            read_columns(b"x,U\n0,1\n1,2\n"),
            Err(TableError::Whole(_))
        ));
        assert!(matches!(read_columns(b""), Err(TableError::Whole(_))));
    }

    // Rebuilding from the same knot values repeats the same arithmetic (bit-identical); a constant
    // shift c moves U by c up to the rounding of U + c (1e-12 for |U| <= 72 kT here), and U'' by
    // those roundings over h² = 0.01 (1e-9).
    #[test]
    fn rebuilt_from_knot_values() {
        let x: Vec<f64> = (0..=40).map(|i| -2.0 + f64::from(i) * 0.1).collect();
        let u: Vec<f64> = x.iter().map(|&x| 8.0 * (x * x - 1.0).powi(2)).collect();
        let cols = Columns {
            x: x.clone(),
            u,
            sigma_u: Some(vec![0.2; 41]),
            d: Some(vec![1.5; 41]),
            sigma_d: None,
        };
        let t = Table::new(&cols, 0.5);
        let same = t.with_knot_u(t.knot_u());
        let shifted: Vec<f64> = t.knot_u().iter().map(|u| u + 0.3).collect();
        let moved = t.with_knot_u(&shifted);
        assert_eq!(same.sigma_u(), Some(&[0.1; 41][..]));
        assert!(same.diffusion().is_some());
        for &p in &[-2.5, -1.33, 0.0, 0.71, 1.99, 2.2] {
            assert_eq!(same.u(p).to_bits(), t.u(p).to_bits());
            assert!((moved.u(p) - t.u(p) - 0.3).abs() < 1e-12);
            assert!((moved.d2u(p) - t.d2u(p)).abs() < 1e-9);
        }
    }

    #[test]
    fn exact_derivative_roots() {
        let xs: Vec<f64> = (0..=400).map(|i| -2.0 + f64::from(i) * 0.01).collect();
        let ys: Vec<f64> = xs.iter().map(|&x| (x * x - 1.0).powi(2)).collect();
        let s = Spline::new(&xs, &ys);
        let r = s.derivative_roots();
        assert_eq!(r.len(), 3, "{r:?}");
        // a quartic on h = 0.01 knots: the spline's extrema move by O(h^4) ~ 1e-8
        for (got, want) in r.iter().zip([-1.0, 0.0, 1.0]) {
            assert!((got - want).abs() < 1e-7);
        }
    }
}
