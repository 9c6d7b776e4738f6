//! A surface U(x, y) given as a table on a rectangular grid in long format (one row per node:
//! x, y, U[, sigma_U], rows in any order), interpolated by the tensor-product not-a-knot cubic
//! spline (de Boor, A Practical Guide to Splines, Ch. XVII).
//!
//! The grid axes are the distinct x and distinct y values of the rows. A node of the Cartesian
//! product that no row lists, or whose U is +inf, is missing: the four cells around it are
//! forbidden ([`Surface::allowed`] is false there, U = +∞). A table with absent rows must be
//! uniformly spaced on each axis (spacing = the median gap between distinct values) so that a
//! mistyped coordinate shows as a row off the grid instead of a new grid line; a table listing
//! every node (with +inf where forbidden) may have any spacing.
//!
//! On each cell the surface is the bicubic Hermite patch with the nodal values, ∂x U, ∂y U and
//! ∂²U/∂x∂y of the tensor-product spline (∂x U from the spline along each row, ∂y U along each
//! column, the cross derivative from the spline of ∂x U along each column), which equals the
//! tensor-product spline itself on a complete grid; value, gradient and Hessian are analytic, and
//! the interpolation error is O(h⁴) in U (O(h³) in the gradient, O(h²) in the Hessian). Around
//! missing nodes the splines run over each unbroken stretch of finite nodes (fewer than four
//! nodes: the polynomial through them), so the surface stays C¹.

use super::surface::{Point, Rect, Surface, Sym2};
use super::table::{MIN_ROWS, Spline, data_lines, header_columns, line_err, utf8_text};
use std::collections::BTreeMap;

/// A problem in a grid table: the profile reader's error (a line and its message, or the table
/// as a whole).
pub type GridError = super::table::TableError;

/// One data row of a grid table, in the file's units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GridRow {
    /// 1-based line number in the file
    pub line: usize,
    /// x
    pub x: f64,
    /// y
    pub y: f64,
    /// U (+inf: forbidden)
    pub u: f64,
    /// standard error of U, if the table has a sigma_U column
    pub sigma_u: Option<f64>,
}

#[derive(Clone, Copy, PartialEq)]
enum Col {
    X,
    Y,
    U,
    Sigma,
}

fn header_name(s: &str) -> Option<Col> {
    match s.to_ascii_lowercase().as_str() {
        "x" => Some(Col::X),
        "y" => Some(Col::Y),
        "u" | "f" | "energy" => Some(Col::U),
        "sigma_u" | "sigma" | "u_err" | "stderr" => Some(Col::Sigma),
        _ => None,
    }
}

/// Reads grid table text: columns by header names (x, y, U, sigma_U) when the first data line is
/// a header, else by count (3 = x, y, U; 4 = x, y, U, sigma_U); fields separated by commas or
/// whitespace; `#` starts a comment line. U may be `inf` (a forbidden node).
///
/// # Errors
/// Non-UTF-8 bytes, unknown or repeated header names, ragged rows, non-numeric fields, x or y not
/// finite, U NaN or −inf, σ_U negative or not finite; each with its line.
pub fn read_grid(bytes: &[u8]) -> Result<Vec<GridRow>, GridError> {
    let text = utf8_text(bytes).map_err(|line| line_err(line, "the file is not UTF-8 text"))?;
    let mut layout: Option<Vec<Col>> = None;
    let mut rows = Vec::new();
    for (line_no, fields, numbers) in data_lines(text) {
        if layout.is_none() {
            if numbers.iter().all(Option::is_none) {
                let named = header_columns(&fields, header_name, "x, y, U, sigma_U")
                    .map_err(|m| line_err(line_no, m))?;
                if ![Col::X, Col::Y, Col::U].iter().all(|c| named.contains(c)) {
                    return Err(line_err(line_no, "the header must name columns x, y and U"));
                }
                layout = Some(named);
                continue;
            }
            layout = Some(match fields.len() {
                3 => vec![Col::X, Col::Y, Col::U],
                4 => vec![Col::X, Col::Y, Col::U, Col::Sigma],
                n => {
                    return Err(line_err(
                        line_no,
                        format!("{n} columns without a header (expected 3 or 4: x, y, U, sigma_U)"),
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
        let mut row = GridRow {
            line: line_no,
            x: 0.0,
            y: 0.0,
            u: 0.0,
            sigma_u: None,
        };
        for (k, (&col, v)) in lay.iter().zip(&numbers).enumerate() {
            let Some(v) = *v else {
                return Err(line_err(
                    line_no,
                    format!("field {} \"{}\" is not a number", k + 1, fields[k]),
                ));
            };
            let bad = match col {
                Col::X | Col::Y | Col::Sigma => !v.is_finite(),
                Col::U => v.is_nan() || v == f64::NEG_INFINITY,
            };
            if bad {
                let allowed = if col == Col::U {
                    " (only U may be +inf, a forbidden node)"
                } else {
                    ""
                };
                return Err(line_err(
                    line_no,
                    format!("field {} is \"{}\"{allowed}", k + 1, fields[k]),
                ));
            }
            match col {
                Col::X => row.x = v,
                Col::Y => row.y = v,
                Col::U => row.u = v,
                Col::Sigma if v < 0.0 => return Err(line_err(line_no, "sigma_U is negative")),
                Col::Sigma => row.sigma_u = Some(v),
            }
        }
        rows.push(row);
    }
    Ok(rows)
}

/// One axis of the grid: its sorted values, and for each distinct value the first line carrying
/// it. Values closer than 1e-9 of the axis range are one value (decimal round-off).
fn axis(rows: &[GridRow], pick: fn(&GridRow) -> f64) -> Vec<(f64, usize)> {
    let mut v: Vec<(f64, usize)> = rows.iter().map(|r| (pick(r), r.line)).collect();
    v.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let tol = 1e-9 * (v[v.len() - 1].0 - v[0].0).abs();
    let mut out: Vec<(f64, usize)> = Vec::new();
    for (x, line) in v {
        match out.last_mut() {
            Some(last) if x - last.0 <= tol => last.1 = last.1.min(line),
            _ => out.push((x, line)),
        }
    }
    out
}

/// Index of `x` among `values` (within 1e-9 of the range).
fn index_of(values: &[f64], x: f64) -> Option<usize> {
    let tol = 1e-9 * (values[values.len() - 1] - values[0]);
    let k = values.partition_point(|&v| v < x - tol);
    (k < values.len() && (values[k] - x).abs() <= tol).then_some(k)
}

/// The uniform axis through the distinct `values` (spacing = median gap, anchored at the value
/// with the most rows), or the first line of a value off it.
fn uniform_axis(
    values: &[(f64, usize)],
    counts: &[usize],
    name: &str,
) -> Result<Vec<f64>, GridError> {
    let mut gaps: Vec<f64> = values.windows(2).map(|w| w[1].0 - w[0].0).collect();
    gaps.sort_by(f64::total_cmp);
    let h = gaps[gaps.len() / 2];
    let anchor = values[(0..values.len()).max_by_key(|&k| counts[k]).unwrap_or(0)].0;
    for &(v, line) in values {
        let k = (v - anchor) / h;
        if (k - k.round()).abs() > 1e-6 {
            return Err(line_err(
                line,
                format!(
                    "{name} = {v} is off the grid (spacing {h} through {name} = {anchor}); a table with absent nodes must be uniformly spaced (list forbidden nodes with U = inf)"
                ),
            ));
        }
    }
    let (lo, hi) = (values[0].0, values[values.len() - 1].0);
    let n = ((hi - lo) / h).round() as usize;
    Ok((0..=n).map(|k| lo + h * k as f64).collect())
}

/// A surface interpolated from a grid table (energies in kT).
#[derive(Debug, Clone)]
pub struct GridSurface {
    xs: Vec<f64>,
    ys: Vec<f64>,
    /// per node (index i + nx·j): U, ∂x U, ∂y U, ∂²U/∂x∂y; U = +inf at missing nodes
    nodes: Vec<[f64; 4]>,
    /// per cell (index i + (nx−1)·j): all four corners finite
    cell_ok: Vec<bool>,
    sigma_u: Option<Vec<f64>>,
    /// nodes no row lists (forbidden like U = +inf, but perhaps not on purpose)
    absent: usize,
}

/// Derivatives at the knots of the interpolant of (x, f) over each unbroken stretch of finite f
/// (not-a-knot spline from 4 knots, the polynomial through 2 or 3); 0 at isolated and missing
/// nodes (no allowed cell uses them).
fn knot_slopes(x: &[f64], f: &[f64]) -> Vec<f64> {
    let mut out = vec![0.0; x.len()];
    let mut a = 0;
    while a < x.len() {
        if !f[a].is_finite() {
            a += 1;
            continue;
        }
        let mut b = a;
        while b + 1 < x.len() && f[b + 1].is_finite() {
            b += 1;
        }
        let (xr, fr) = (&x[a..=b], &f[a..=b]);
        match xr.len() {
            1 => {}
            2 => {
                let s = (fr[1] - fr[0]) / (xr[1] - xr[0]);
                out[a] = s;
                out[b] = s;
            }
            3 => {
                // derivative of the parabola through three points (Lagrange form)
                for k in 0..3 {
                    let (m, o) = ((k + 1) % 3, (k + 2) % 3);
                    let basis = |m: usize, o: usize| {
                        fr[m] * (xr[k] - xr[o]) / ((xr[m] - xr[k]) * (xr[m] - xr[o]))
                    };
                    out[a + k] = fr[k] * (1.0 / (xr[k] - xr[m]) + 1.0 / (xr[k] - xr[o]))
                        + basis(m, o)
                        + basis(o, m);
                }
            }
            _ => {
                let s = Spline::new(xr, fr);
                for (k, &xk) in xr.iter().enumerate() {
                    out[a + k] = s.d1(xk);
                }
            }
        }
        a = b + 1;
    }
    out
}

/// Cubic Hermite basis on [0, 1] and its first two derivatives: for the value at 0, the slope at
/// 0, the value at 1, the slope at 1.
fn hermite(t: f64) -> [[f64; 4]; 3] {
    let (t2, t3) = (t * t, t * t * t);
    [
        [
            2.0 * t3 - 3.0 * t2 + 1.0,
            t3 - 2.0 * t2 + t,
            -2.0 * t3 + 3.0 * t2,
            t3 - t2,
        ],
        [
            6.0 * t2 - 6.0 * t,
            3.0 * t2 - 4.0 * t + 1.0,
            -6.0 * t2 + 6.0 * t,
            3.0 * t2 - 2.0 * t,
        ],
        [
            12.0 * t - 6.0,
            6.0 * t - 4.0,
            -12.0 * t + 6.0,
            6.0 * t - 2.0,
        ],
    ]
}

impl GridSurface {
    /// Builds the surface from rows in any order; `scale` multiplies U and σ_U to give kT.
    ///
    /// # Errors
    /// Fewer than 4 grid lines on an axis, a node listed twice (naming both lines), a row off a
    /// uniform grid when nodes are absent, σ_U on some rows only, no cell with four finite
    /// corners.
    pub fn new(rows: &[GridRow], scale: f64) -> Result<Self, GridError> {
        if rows.is_empty() {
            return Err(GridError::Whole("the grid table has no data rows".into()));
        }
        let (ax, ay) = (axis(rows, |r| r.x), axis(rows, |r| r.y));
        let count = |a: &[(f64, usize)], pick: fn(&GridRow) -> f64| -> Vec<usize> {
            let vals: Vec<f64> = a.iter().map(|v| v.0).collect();
            let mut c = vec![0; a.len()];
            for r in rows {
                if let Some(k) = index_of(&vals, pick(r)) {
                    c[k] += 1;
                }
            }
            c
        };
        let (xs, ys) = if ax.len() * ay.len() == rows.len() {
            (
                ax.iter().map(|v| v.0).collect::<Vec<_>>(),
                ay.iter().map(|v| v.0).collect::<Vec<_>>(),
            )
        } else {
            if ax.len() < 2 || ay.len() < 2 {
                return Err(GridError::Whole(format!(
                    "the rows span {} x value(s) and {} y value(s): a grid needs at least {MIN_ROWS} of each",
                    ax.len(),
                    ay.len()
                )));
            }
            (
                uniform_axis(&ax, &count(&ax, |r| r.x), "x")?,
                uniform_axis(&ay, &count(&ay, |r| r.y), "y")?,
            )
        };
        let (nx, ny) = (xs.len(), ys.len());
        if nx < MIN_ROWS || ny < MIN_ROWS {
            return Err(GridError::Whole(format!(
                "the grid has {nx} x value(s) and {ny} y value(s): a bicubic spline needs at least {MIN_ROWS} of each"
            )));
        }
        let with_sigma = rows[0].sigma_u.is_some();
        let mut u = vec![f64::INFINITY; nx * ny];
        let mut sigma = vec![f64::NAN; nx * ny];
        let mut first_line: BTreeMap<usize, usize> = BTreeMap::new();
        for r in rows {
            // on a uniform grid every row lies on it (checked above); a complete one is exact
            let (i, j) = match (index_of(&xs, r.x), index_of(&ys, r.y)) {
                (Some(i), Some(j)) => (i, j),
                _ => return Err(line_err(r.line, "the row lies off the grid")),
            };
            let k = i + nx * j;
            if let Some(first) = first_line.insert(k, r.line) {
                return Err(line_err(
                    r.line,
                    format!(
                        "the node (x = {}, y = {}) is listed twice (first on line {first})",
                        r.x, r.y
                    ),
                ));
            }
            u[k] = scale * r.u;
            sigma[k] = r.sigma_u.map_or(f64::NAN, |s| scale * s);
        }
        let absent = nx * ny - first_line.len();
        let cell_ok: Vec<bool> = (0..(nx - 1) * (ny - 1))
            .map(|c| {
                let (i, j) = (c % (nx - 1), c / (nx - 1));
                [(0, 0), (1, 0), (0, 1), (1, 1)]
                    .iter()
                    .all(|&(a, b)| u[i + a + nx * (j + b)].is_finite())
            })
            .collect();
        if !cell_ok.iter().any(|&c| c) {
            return Err(GridError::Whole(
                "no cell of the grid has four finite corners (U = inf or absent everywhere)".into(),
            ));
        }
        // ∂x along rows, ∂y along columns, the cross derivative from ∂x along columns
        let mut nodes: Vec<[f64; 4]> = u.iter().map(|&v| [v, 0.0, 0.0, 0.0]).collect();
        for j in 0..ny {
            let row: Vec<f64> = (0..nx).map(|i| u[i + nx * j]).collect();
            for (i, s) in knot_slopes(&xs, &row).into_iter().enumerate() {
                nodes[i + nx * j][1] = s;
            }
        }
        for i in 0..nx {
            let col: Vec<f64> = (0..ny).map(|j| u[i + nx * j]).collect();
            let fx: Vec<f64> = (0..ny)
                .map(|j| {
                    let n = nodes[i + nx * j];
                    if n[0].is_finite() {
                        n[1]
                    } else {
                        f64::INFINITY
                    }
                })
                .collect();
            let (sy, sxy) = (knot_slopes(&ys, &col), knot_slopes(&ys, &fx));
            for j in 0..ny {
                nodes[i + nx * j][2] = sy[j];
                nodes[i + nx * j][3] = sxy[j];
            }
        }
        Ok(Self {
            xs,
            ys,
            nodes,
            cell_ok,
            sigma_u: with_sigma.then_some(sigma),
            absent,
        })
    }

    /// Reads and builds in one step (see [`read_grid`] and [`GridSurface::new`]).
    ///
    /// # Errors
    /// As [`read_grid`] and [`GridSurface::new`].
    pub fn from_bytes(bytes: &[u8], scale: f64) -> Result<Self, GridError> {
        Self::new(&read_grid(bytes)?, scale)
    }

    /// The grid's x values.
    pub fn xs(&self) -> &[f64] {
        &self.xs
    }
    /// The grid's y values.
    pub fn ys(&self) -> &[f64] {
        &self.ys
    }
    /// The number of nodes that no row lists.
    pub fn absent_nodes(&self) -> usize {
        self.absent
    }
    /// U at node (i, j) in kT (+inf if missing).
    pub fn node_u(&self, i: usize, j: usize) -> f64 {
        self.nodes[i + self.xs.len() * j][0]
    }
    /// σ_U at node (i, j) in kT, if the table had a sigma_U column (NaN at absent nodes).
    pub fn node_sigma_u(&self, i: usize, j: usize) -> Option<f64> {
        self.sigma_u.as_ref().map(|s| s[i + self.xs.len() * j])
    }

    /// The cell (i, j) containing p, clamped to the grid.
    fn cell(&self, p: Point) -> (usize, usize) {
        let find = |v: &[f64], x: f64| v[1..v.len() - 1].partition_point(|&k| k <= x);
        (find(&self.xs, p[0]), find(&self.ys, p[1]))
    }

    /// (U, gradient, Hessian) at p, or None in a forbidden cell.
    fn eval(&self, p: Point) -> Option<(f64, [f64; 2], Sym2)> {
        let (i, j) = self.cell(p);
        let nx = self.xs.len();
        if !self.cell_ok[i + (nx - 1) * j] {
            return None;
        }
        let (hx, hy) = (self.xs[i + 1] - self.xs[i], self.ys[j + 1] - self.ys[j]);
        let bx = hermite((p[0] - self.xs[i]) / hx);
        let by = hermite((p[1] - self.ys[j]) / hy);
        // for corner (a, b): basis indices 2a (value) and 2a + 1 (slope) along each axis
        let mut d = [[0.0; 3]; 3];
        for a in 0..2 {
            for b in 0..2 {
                let [f, fx, fy, fxy] = self.nodes[i + a + nx * (j + b)];
                for (m, wx) in bx.iter().enumerate() {
                    for (n, wy) in by.iter().enumerate() {
                        if m + n > 2 {
                            continue;
                        }
                        let (v0, v1, s0, s1) = (wx[2 * a], wx[2 * a + 1], wy[2 * b], wy[2 * b + 1]);
                        d[m][n] += f * v0 * s0
                            + fx * hx * v1 * s0
                            + fy * hy * v0 * s1
                            + fxy * hx * hy * v1 * s1;
                    }
                }
            }
        }
        // d[m][n] is ∂^m_t ∂^n_s; back to x and y
        let g = [d[1][0] / hx, d[0][1] / hy];
        let hxy = d[1][1] / (hx * hy);
        let h = [[d[2][0] / (hx * hx), hxy], [hxy, d[0][2] / (hy * hy)]];
        Some((d[0][0], g, h))
    }
}

impl Surface for GridSurface {
    /// +∞ in a forbidden cell; the edge cells' polynomials continue outside the box.
    fn u(&self, p: Point) -> f64 {
        self.eval(p).map_or(f64::INFINITY, |e| e.0)
    }
    /// NaN in a forbidden cell.
    fn grad(&self, p: Point) -> [f64; 2] {
        self.eval(p).map_or([f64::NAN; 2], |e| e.1)
    }
    /// NaN in a forbidden cell.
    fn hessian(&self, p: Point) -> Sym2 {
        self.eval(p).map_or([[f64::NAN; 2]; 2], |e| e.2)
    }
    fn domain(&self) -> Rect {
        Rect {
            x: (self.xs[0], self.xs[self.xs.len() - 1]),
            y: (self.ys[0], self.ys[self.ys.len() - 1]),
        }
    }
    fn allowed(&self, p: Point) -> bool {
        let (i, j) = self.cell(p);
        self.domain().contains(p) && self.cell_ok[i + (self.xs.len() - 1) * j]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rows of f on the grid xs × ys, in a scrambled but fixed order.
    fn rows(xs: &[f64], ys: &[f64], f: impl Fn(f64, f64) -> f64) -> Vec<GridRow> {
        let mut out = Vec::new();
        for &y in ys {
            for &x in xs {
                out.push((x, y));
            }
        }
        // a fixed permutation: stride 13 through the list (coprime with every length used here)
        let n = out.len();
        (0..n)
            .map(|k| {
                let (x, y) = out[(13 * k) % n];
                GridRow {
                    line: k + 1,
                    x,
                    y,
                    u: f(x, y),
                    sigma_u: None,
                }
            })
            .collect()
    }

    fn lin(lo: f64, hi: f64, n: usize) -> Vec<f64> {
        (0..n)
            .map(|k| lo + (hi - lo) * k as f64 / (n - 1) as f64)
            .collect()
    }

    /// The tensor-product not-a-knot spline reproduces every polynomial of degree ≤ 3 in each
    /// variable exactly (de Boor, Ch. XVII); 1e-9 allows for rounding in the spline systems.
    #[test]
    fn bicubic_polynomials_are_exact() {
        let f = |x: f64, y: f64| x * x * x - 2.0 * x * y * y + y * y * y * x * x + 0.5 * y;
        // uneven spacing in y: the complete table needs no uniform grid
        let ys = [-1.0, -0.6, -0.1, 0.3, 0.8, 1.0];
        let s = GridSurface::new(&rows(&lin(-1.0, 1.5, 9), &ys, f), 1.0).unwrap();
        for p in [[0.13, 0.77], [-0.9, -0.95], [1.4, 0.2]] {
            let (x, y) = (p[0], p[1]);
            assert!((s.u(p) - f(x, y)).abs() < 1e-9);
            let g = s.grad(p);
            assert!((g[0] - (3.0 * x * x - 2.0 * y * y + 2.0 * x * y * y * y)).abs() < 1e-9);
            assert!((g[1] - (-4.0 * x * y + 3.0 * y * y * x * x + 0.5)).abs() < 1e-9);
            let h = s.hessian(p);
            assert!((h[0][1] - (-4.0 * y + 6.0 * x * y * y)).abs() < 1e-8);
            assert!((h[1][1] - (-4.0 * x + 6.0 * y * x * x)).abs() < 1e-8);
        }
    }

    /// The interpolation error of a smooth surface falls as h⁴ (de Boor, Ch. XVII): halving h
    /// divides it by about 16; the band 10–22 allows for the pre-asymptotic mixture of terms.
    /// Derivatives agree with central differences of the value (step 1e-5: truncation ~1e-10,
    /// rounding ~1e-11, far below 1e-6).
    #[test]
    fn smooth_surface_error_is_fourth_order() {
        let f = |x: f64, y: f64| (1.3 * x).sin() * (0.7 * y).cos() + 0.2 * x * y;
        let probe = [[0.31, 0.47], [1.7, -0.9], [-1.2, 1.3], [0.05, 0.02]];
        let err = |n: usize| {
            let s =
                GridSurface::new(&rows(&lin(-2.0, 2.0, n), &lin(-2.0, 2.0, n), f), 1.0).unwrap();
            // the largest error over a fine lattice of points off the grid lines
            let fine = lin(-1.93, 1.97, 57);
            fine.iter()
                .flat_map(|&x| fine.iter().map(move |&y| [x, y]))
                .map(|p| (s.u(p) - f(p[0], p[1])).abs())
                .fold(0.0, f64::max)
        };
        let ratio = err(21) / err(41);
        assert!((10.0..22.0).contains(&ratio), "ratio {ratio}");
        let s = GridSurface::new(&rows(&lin(-2.0, 2.0, 21), &lin(-2.0, 2.0, 21), f), 1.0).unwrap();
        let h = 1e-5;
        for p in probe {
            let g = s.grad(p);
            let gx = (s.u([p[0] + h, p[1]]) - s.u([p[0] - h, p[1]])) / (2.0 * h);
            let gy = (s.u([p[0], p[1] + h]) - s.u([p[0], p[1] - h])) / (2.0 * h);
            assert!((g[0] - gx).abs() < 1e-6 && (g[1] - gy).abs() < 1e-6);
            let hm = s.hessian(p);
            let hxy = (s.grad([p[0], p[1] + h])[0] - s.grad([p[0], p[1] - h])[0]) / (2.0 * h);
            let hyy = (s.grad([p[0], p[1] + h])[1] - s.grad([p[0], p[1] - h])[1]) / (2.0 * h);
            assert!((hm[0][1] - hxy).abs() < 1e-6 && (hm[1][1] - hyy).abs() < 1e-6);
        }
    }

    /// Missing and +inf nodes forbid the cells around them and nothing else.
    #[test]
    fn missing_nodes_forbid_their_cells() {
        let xs = lin(0.0, 5.0, 6);
        let mut r = rows(&xs, &xs, |x, y| x + y);
        // drop the corner node (5, 5), set (0, 0) to inf
        r.retain(|row| !(row.x == 5.0 && row.y == 5.0));
        for row in &mut r {
            if row.x == 0.0 && row.y == 0.0 {
                row.u = f64::INFINITY;
            }
        }
        let s = GridSurface::new(&r, 2.0).unwrap();
        assert!(!s.allowed([4.5, 4.5]) && s.u([4.5, 4.5]) == f64::INFINITY);
        assert!(!s.allowed([0.5, 0.5]) && s.grad([0.5, 0.5])[0].is_nan());
        assert!(s.allowed([3.5, 4.5]) && s.allowed([4.5, 3.5]) && s.allowed([1.5, 0.5]));
        assert!(!s.allowed([6.0, 1.0]));
        // a plane is reproduced on the allowed cells, scaled by 2
        assert!((s.u([2.2, 3.7]) - 2.0 * 5.9).abs() < 1e-12);
        assert!((s.u([4.5, 3.5]) - 16.0).abs() < 1e-12);
    }

    fn text_err(t: &str) -> GridError {
        GridSurface::from_bytes(t.as_bytes(), 1.0).unwrap_err()
    }

    fn table(extra: &str) -> String {
        let mut t = String::from("# a test grid\nx, y, U\n");
        for j in 0..4 {
            for i in 0..4 {
                t.push_str(&format!("{}, {}, {}\n", 0.1 * i as f64, j, i + j));
            }
        }
        t + extra
    }

    #[test]
    fn bad_tables_name_their_lines() {
        assert!(GridSurface::from_bytes(table("").as_bytes(), 1.0).is_ok());
        // line 3 holds the first data row (x = 0, y = 0)
        let e = text_err(&table("0, 0, 7\n"));
        assert_eq!(
            e.to_string(),
            "line 19: the node (x = 0, y = 0) is listed twice (first on line 3)"
        );
        let e = text_err(&table("0.15, 2, 1\n"));
        assert!(
            e.to_string()
                .starts_with("line 19: x = 0.15 is off the grid"),
            "{e}"
        );
        let e = text_err(&table("0.1, 2\n"));
        assert_eq!(e.to_string(), "line 19: 2 fields, expected 3");
        let e = text_err(&table("0.1, nan, 2\n"));
        assert!(
            e.to_string().starts_with("line 19: field 2 is \"nan\""),
            "{e}"
        );
        let e = text_err(&table("0.1, 5, -inf\n"));
        assert!(
            e.to_string().starts_with("line 19: field 3 is \"-inf\""),
            "{e}"
        );
        let e = text_err(&table("0.1, 5, abc\n"));
        assert_eq!(e.to_string(), "line 19: field 3 \"abc\" is not a number");
        let e = text_err("x, z, U\n");
        assert!(e.to_string().starts_with("line 1: unknown column \"z\""));
        let e = text_err("0 0 1\n1 0 1\n0 1 1\n1 1 1\n");
        assert!(matches!(e, GridError::Whole(_)), "{e}");
        let e = text_err("x y U\n");
        assert!(matches!(e, GridError::Whole(_)), "{e}");
    }

    /// The parabola through three nodes has the exact derivative of a quadratic.
    #[test]
    fn short_runs_use_the_polynomial() {
        let x = [0.0, 1.0, 3.0, 4.0, 5.0];
        let f = [1.0, 2.0, 10.0, f64::INFINITY, 3.0];
        let q = |t: f64| 1.0 + 0.0 * t + t * t;
        assert_eq!(f[..3], [q(0.0), q(1.0), q(3.0)]);
        let s = knot_slopes(&x, &f);
        for (k, &xk) in x[..3].iter().enumerate() {
            assert!((s[k] - 2.0 * xk).abs() < 1e-12);
        }
        assert_eq!(s[3..], [0.0, 0.0]);
    }
}
