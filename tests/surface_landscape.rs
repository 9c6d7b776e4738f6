//! The landscape of two-coordinate surfaces: minima, saddles, the minimum energy path (string
//! method) and the barrier, on the Müller–Brown surface, a separable double well, a bent valley
//! and a grid table of the bent valley.

use escapade::landscape::surface::{SurfaceLandscape, analyse_surface};
use escapade::potential::grid::{GridRow, GridSurface};
use escapade::potential::surface::{FormulaSurface, MullerBrown, Point, Rect, Surface};
use escapade::potential::{Formula2, GridError};
use std::collections::BTreeMap;

fn formula(src: &str, x: (f64, f64), y: (f64, f64)) -> FormulaSurface {
    let f = Formula2::parse(src, ["x", "y"], &BTreeMap::new()).unwrap();
    FormulaSurface::new(f, 1.0, Rect { x, y })
}

fn dist(a: Point, b: Point) -> f64 {
    (a[0] - b[0]).hypot(a[1] - b[1])
}

/// The image spacing of the converged string.
fn spacing(l: &SurfaceLandscape) -> f64 {
    l.mep.points[1].s
}

fn reference() -> serde_json::Value {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/reference/muller_brown_values.json"
    ))
    .unwrap();
    serde_json::from_str(&text).unwrap()
}

/// Müller–Brown: three minima and two saddles against reference/muller_brown_values.json
/// (reference/muller_brown.py, mpmath at 30 digits). Newton's method stops when its step falls
/// below 1e-10 of 2% of the box diagonal (~7e-12), so positions agree to 1e-9 and U to 1e-9
/// relative; the eigenvalues to 1e-8 relative (one Hessian at a point off by 1e-11).
#[test]
fn muller_brown_stationary_points_match_the_reference() {
    let l = analyse_surface(&MullerBrown::new(1.0), None, None).unwrap();
    let r = reference();
    for (kind, found) in [("minima", &l.minima), ("saddles", &l.saddles)] {
        let want = r[kind].as_array().unwrap();
        assert_eq!(found.len(), want.len(), "{kind}");
        for w in want {
            let p = [w["x"].as_f64().unwrap(), w["y"].as_f64().unwrap()];
            let got = found.iter().find(|m| dist(m.position, p) < 1e-9);
            let got = got.unwrap_or_else(|| panic!("{kind}: none at {p:?}"));
            let u = w["u"].as_f64().unwrap();
            assert!((got.u - u).abs() < 1e-9 * u.abs());
            for k in 0..2 {
                let e = w["eigenvalues"][k].as_f64().unwrap();
                assert!((got.eigenvalues[k] - e).abs() < 1e-8 * e.abs());
            }
        }
    }
    // the published values (Müller & Brown 1979, 3 decimals in x, y and 2 in U): minima A, B, C
    // and saddles; tolerances are half a unit of the last published digit
    let published_min = [
        (-0.558, 1.442, -146.70),
        (0.623, 0.028, -108.17),
        (-0.050, 0.467, -80.77),
    ];
    for (m, (x, y, u)) in l.minima.iter().zip(published_min) {
        assert!((m.position[0] - x).abs() < 5e-4 && (m.position[1] - y).abs() < 5e-4);
        assert!((m.u - u).abs() < 5e-3);
    }
    let published_saddle = [(0.212, 0.293, -72.25), (-0.822, 0.624, -40.66)];
    for (s, (x, y, u)) in l.saddles.iter().zip(published_saddle) {
        assert!((s.position[0] - x).abs() < 5e-4 && (s.position[1] - y).abs() < 5e-4);
        assert!((s.u - u).abs() < 5e-3);
        assert!(s.eigenvalues[0] < 0.0 && s.eigenvalues[1] > 0.0);
    }
}

/// The MEP from the deepest minimum A to the second deepest B passes through the intermediate
/// minimum C: two steps A → S1 → C → S2 → B, the higher saddle S1 limits the rate. The saddles
/// lie on the string within a tenth of the image spacing (linear reparametrisation cuts corners
/// by O(ds² × curvature)), and the string's highest image is within ds²·|λ| of U at S1.
#[test]
fn muller_brown_path_reports_both_saddles_and_the_intermediate_minimum() {
    let l = analyse_surface(&MullerBrown::new(1.0), None, None).unwrap();
    assert!(l.mep.converged, "residual {}", l.mep.residual);
    assert_eq!((l.reactant, l.product), (0, 1));
    assert_eq!(l.steps.len(), 2);
    assert_eq!(l.intermediate_minima(), vec![2]);
    let (s1, s2) = (l.steps[0].saddle, l.steps[1].saddle);
    assert_eq!((s1, s2), (1, 0));
    assert_eq!(l.rate_limiting_saddle, s1);
    let (ua, ub, us1) = (l.minima[0].u, l.minima[1].u, l.saddles[s1].u);
    assert_eq!(l.barrier, us1 - ua);
    assert_eq!(l.reverse_barrier, us1 - ub);
    assert_eq!(l.steps[1].forward_barrier, l.saddles[s2].u - l.minima[2].u);
    let ds = spacing(&l);
    for st in &l.steps {
        assert!(st.distance_to_string < 0.1 * ds, "{st:?} ds {ds}");
    }
    let top = l.mep.points.iter().map(|p| p.u).fold(f64::MIN, f64::max);
    assert!(
        top <= us1 + 1e-9 && us1 - top < ds * ds * 751.0,
        "{top} {us1}"
    );
    // the path starts and ends at the minima
    let (first, last) = (l.mep.points[0], l.mep.points[l.mep.points.len() - 1]);
    assert!(dist(first.position, l.minima[0].position) < 1e-12);
    assert!(dist(last.position, l.minima[1].position) < 1e-12);
}

/// start/target choose the basins: from B to A the same two saddles, now S2 first, and the
/// barrier from B. Scaling the surface scales energies and curvatures, not positions (exact
/// algebra; 1e-9 as above).
#[test]
fn start_and_target_choose_the_basins() {
    let l = analyse_surface(&MullerBrown::new(1.0), Some([0.5, 0.1]), Some([-0.5, 1.3])).unwrap();
    assert_eq!((l.reactant, l.product), (1, 0));
    assert_eq!(
        l.steps.iter().map(|s| s.saddle).collect::<Vec<_>>(),
        vec![0, 1]
    );
    assert_eq!(l.barrier, l.saddles[1].u - l.minima[1].u);
    let half = analyse_surface(&MullerBrown::new(0.5), None, None).unwrap();
    let full = analyse_surface(&MullerBrown::new(1.0), None, None).unwrap();
    assert!((half.barrier - 0.5 * full.barrier).abs() < 1e-9 * full.barrier);
    assert!(dist(half.saddles[1].position, full.saddles[1].position) < 1e-9);
    // a start in the forbidden outside of the box is refused
    assert!(analyse_surface(&MullerBrown::new(1.0), Some([3.0, 0.0]), None).is_err());
}

/// U = U1(x) + k y²/2 with U1 = 5 (x² − 1)², k = 8: minima at (±1, 0), saddle at (0, 0) with
/// eigenvalues (U1''(0), k) = (−20, 8) and at the minima (k, U1''(±1)) = (8, 40) (closed forms).
/// Equal minima: the tie goes to the smaller x, so the reactant is (−1, 0). The MEP is y = 0 to
/// rounding (by symmetry the force has no y component on it).
#[test]
fn separable_double_well() {
    let s = formula("5*(x^2 - 1)^2 + 8*y^2/2", (-2.0, 2.0), (-1.5, 1.5));
    let l = analyse_surface(&s, None, None).unwrap();
    assert_eq!(l.minima.len(), 2);
    assert_eq!(l.saddles.len(), 1);
    assert!(dist(l.minima[l.reactant].position, [-1.0, 0.0]) < 1e-12);
    assert!(dist(l.minima[l.product].position, [1.0, 0.0]) < 1e-12);
    let sd = l.saddles[0];
    assert!(dist(sd.position, [0.0, 0.0]) < 1e-12);
    assert!((sd.eigenvalues[0] + 20.0).abs() < 1e-10 && (sd.eigenvalues[1] - 8.0).abs() < 1e-10);
    assert!((sd.eigenvectors[0][0].abs() - 1.0).abs() < 1e-12);
    for m in &l.minima {
        assert!((m.eigenvalues[0] - 8.0).abs() < 1e-10 && (m.eigenvalues[1] - 40.0).abs() < 1e-10);
    }
    assert!((l.barrier - 5.0).abs() < 1e-12);
    assert!(l.mep.converged);
    assert!(l.mep.points.iter().all(|p| p.position[1].abs() < 1e-10));
    // U along the path is U1(x): the arc length runs from x = −1 to 1
    let last = l.mep.points[l.mep.points.len() - 1];
    assert!((last.s - 2.0).abs() < 1e-9);
}

const BENT: &str = "4*(x^2 - 1)^2 + 6*(y - 0.5*(x - 0.3)^2)^2";

/// A double well along the bent valley y = (x − 0.3)²/2 (our own surface). Closed forms: minima
/// at (±1, (±1 − 0.3)²/2) with U = 0, saddle at (0, 0.045) with Hessian
/// [[−16 + 12·0.09, 12·0.3], [12·0.3, 12]]. The MEP is the curve on which ∇U is parallel to
/// the path: the force across the string is below 1e-3 of the largest |∇U| on it (the central-difference tangent
/// of images ds apart errs by O(ds² × curvature)), and its tangent at the saddle is the
/// negative-curvature eigenvector to 1e-3 (same reason, one image spacing ~0.03).
#[test]
fn bent_valley_path_follows_the_valley() {
    let s = formula(BENT, (-1.6, 1.6), (-0.6, 1.6));
    let l = analyse_surface(&s, Some([-1.0, 0.9]), Some([1.0, 0.2])).unwrap();
    assert_eq!(l.saddles.len(), 1);
    let sd = l.saddles[0];
    assert!(dist(sd.position, [0.0, 0.045]) < 1e-12);
    let h = [[-16.0 + 12.0 * 0.09, 3.6], [3.6, 12.0]];
    let (lam, _) = escapade::potential::surface::sym_eigen(h);
    assert!(
        (sd.eigenvalues[0] - lam[0]).abs() < 1e-10 && (sd.eigenvalues[1] - lam[1]).abs() < 1e-10
    );
    assert!(dist(l.minima[l.reactant].position, [-1.0, 0.845]) < 1e-12);
    assert!(dist(l.minima[l.product].position, [1.0, 0.245]) < 1e-12);
    assert!(l.mep.converged);
    let pts = &l.mep.points;
    let gmax = pts
        .iter()
        .map(|q| {
            let g = s.grad(q.position);
            g[0].hypot(g[1])
        })
        .fold(0.0, f64::max);
    for w in pts.windows(3) {
        let p = w[1].position;
        let g = s.grad(p);
        let t = [
            w[2].position[0] - w[0].position[0],
            w[2].position[1] - w[0].position[1],
        ];
        let across = (g[0] * t[1] - g[1] * t[0]).abs() / t[0].hypot(t[1]);
        assert!(across < 1e-3 * gmax, "at {p:?}: {across} of {gmax}");
        // and it stays in the valley: the valley term 6 w² below 1 kT, a quarter of the barrier
        // (the straight line between the minima reaches 6·0.5² = 1.5 kT at x = 0)
        let w_off = p[1] - 0.5 * (p[0] - 0.3) * (p[0] - 0.3);
        assert!(6.0 * w_off * w_off < 1.0, "at {p:?}");
    }
    let t = l.mep.tangent_near(sd.position);
    let v = sd.eigenvectors[0];
    assert!((t[0] * v[0] + t[1] * v[1]).abs() > 1.0 - 1e-3);
    assert!((l.barrier - 4.0).abs() < 1e-12);
}

/// Rows of the Müller–Brown surface on its box with spacing h, in a scrambled order (stride
/// 101 through the list, coprime with its length), as one would read them from a file; with
/// `drop_corner` the nodes with x > 1 and y > 1.8 (U > 100, far from every well) are absent.
fn mb_rows(h: f64, drop_corner: bool) -> Vec<GridRow> {
    let s = MullerBrown::new(1.0);
    let (nx, ny) = ((2.7 / h).round() as usize, (2.5 / h).round() as usize);
    let mut pts = Vec::new();
    for j in 0..=ny {
        for i in 0..=nx {
            let p = [-1.5 + h * i as f64, -0.5 + h * j as f64];
            if !(drop_corner && p[0] > 1.0 && p[1] > 1.8) {
                pts.push(p);
            }
        }
    }
    let n = pts.len();
    assert!(n % 101 != 0);
    (0..n)
        .map(|k| {
            let p = pts[(101 * k) % n];
            GridRow {
                line: k + 2,
                x: p[0],
                y: p[1],
                u: s.u(p),
                sigma_u: None,
            }
        })
        .collect()
}

/// A grid table of Müller–Brown reproduces its landscape within the interpolation error. The
/// bicubic spline errs by O(h⁴) in U and O(h³) in ∇U, so the stationary points move by
/// O(h³)/|λ| and the barrier by O(h⁴) (de Boor, Ch. XVII). Halving h from 0.025 to 0.0125 must
/// shrink the position error by more than 6 and the barrier error by more than 10 (asymptotically
/// 8 and 16; measured 8.5 and 15.1; at 0.05 → 0.025 the barrier is still pre-asymptotic, 5.7).
/// At h = 0.0125 the errors must stay within 5× of the h = 0.025 values scaled by 1/8 and 1/16
/// (measured 3.4e-6 in position, 9.1e-6 in U). Missing corner nodes are forbidden and change
/// nothing near the path.
#[test]
fn grid_table_reproduces_the_formula_landscape() {
    let exact = analyse_surface(&MullerBrown::new(1.0), None, None).unwrap();
    let err = |h: f64| {
        let g = GridSurface::new(&mb_rows(h, true), 1.0).unwrap();
        assert!(!g.allowed([1.15, 1.95]) && g.allowed([0.9, 1.9]));
        let l = analyse_surface(&g, None, None).unwrap();
        assert_eq!((l.minima.len(), l.steps.len()), (3, 2));
        let mut pos: f64 = 0.0;
        for (a, b) in l.minima.iter().zip(&exact.minima) {
            pos = pos.max(dist(a.position, b.position));
        }
        for st in &l.steps {
            let e = exact
                .saddles
                .iter()
                .map(|x| dist(x.position, l.saddles[st.saddle].position));
            pos = pos.max(e.fold(f64::INFINITY, f64::min));
        }
        let du = (l.barrier - exact.barrier).abs();
        eprintln!("h {h}: position {pos:e}, barrier {du:e}");
        (pos, du)
    };
    let (p1, u1) = err(0.025);
    let (p2, u2) = err(0.0125);
    assert!(p2 < 5.0 * p1 / 8.0 && u2 < 5.0 * u1 / 16.0);
    assert!(p1 / p2 > 6.0 && u1 / u2 > 10.0, "{} {}", p1 / p2, u1 / u2);
}

/// A table with a node listed twice names both lines (the rows are otherwise a fine grid).
#[test]
fn grid_table_errors_name_lines() {
    let mut rows = mb_rows(0.1, false);
    let mut dup = rows[5];
    dup.line = 9999;
    rows.push(dup);
    match GridSurface::new(&rows, 1.0) {
        Err(GridError::Line { line, message }) => {
            assert_eq!(line, 9999);
            assert!(message.contains(&format!("first on line {}", rows[5].line)));
        }
        other => panic!("{other:?}"),
    }
}
