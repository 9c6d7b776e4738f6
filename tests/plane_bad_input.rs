//! Bad two-coordinate scenarios: each is a user mistake, so the binary exits 2 with one line on
//! stderr naming the file and the key (common practice, no source: our own error handling).

use std::path::PathBuf;

const GOOD_SURFACE: &str = "[surface]\nexpr = \"(x^2 - 1)^2 + y^2\"\nx = [-2, 2]\ny = [-1, 1]\n";

/// (name, scenario text, key the message must name, a second expected substring)
const CASES: &[(&str, &str, &str, &str)] = &[
    (
        "not_spd",
        "[particle]\ndiffusion = [[1.0, 2.0], [2.0, 1.0]]\n",
        "particle.diffusion",
        "positive definite",
    ),
    (
        "not_symmetric",
        "[particle]\ndiffusion = [[1.0, 0.2], [0.1, 1.0]]\n",
        "particle.diffusion",
        "symmetric",
    ),
    (
        "diffusion_three",
        "[particle]\ndiffusion = [1.0, 2.0, 3.0]\n",
        "particle.diffusion",
        "line",
    ),
    (
        "diffusion_ragged",
        "[particle]\ndiffusion = [[1.0, 0.0], [0.0]]\n",
        "particle.diffusion",
        "line",
    ),
    (
        "start_three",
        "[particle]\ndiffusion = 1.0\n[states]\nstart = [1, 2, 3]\n",
        "states.start",
        "two numbers",
    ),
    (
        "start_outside",
        "[particle]\ndiffusion = 1.0\n[states]\nstart = [5, 0]\n",
        "states.start",
        "outside the box",
    ),
    (
        "mass_matrix",
        "[particle]\nmass = [[1, 0], [0, 1]]\nfriction = 1.0\n",
        "particle.mass",
        "line",
    ),
    (
        "friction_no_mass",
        "[particle]\nfriction = 1.0\n",
        "particle.mass",
        "required",
    ),
    (
        "no_diffusion",
        "[particle]\n",
        "particle.diffusion",
        "required",
    ),
    (
        "unknown_key",
        "[particle]\ndiffusion = 1.0\nradius = 2.0\n",
        "particle.radius",
        "line",
    ),
    (
        "negative_radius",
        "[particle]\ndiffusion = 1.0\n[states]\nproduct_radius = -1\n",
        "states.product_radius",
        "positive",
    ),
    (
        "start_in_product",
        "[particle]\ndiffusion = 1.0\n[states]\nproduct_radius = 5\n",
        "states.product_radius",
        "reactant minimum",
    ),
];

/// Cases that replace the whole surface section.
const WHOLE: &[(&str, &str, &str, &str)] = &[
    (
        "expr_no_box",
        "[surface]\nexpr = \"x^2 + y^2\"\nx = [-1, 1]\n[particle]\ndiffusion = 1.0\n",
        "surface.y",
        "required",
    ),
    (
        "beside_potential",
        "[potential]\nexpr = \"x^2\"\ndomain = [-1, 1]\n[particle]\ndiffusion = 1.0\n",
        "surface",
        "not both",
    ),
    (
        "box_reversed",
        "[surface]\nexpr = \"x^2 + y^2\"\nx = [1, -1]\ny = [-1, 1]\n[particle]\ndiffusion = 1.0\n",
        "surface.x",
        "lo < hi",
    ),
    (
        "family_unknown",
        "[surface]\nfamily = \"egg-crate\"\n[particle]\ndiffusion = 1.0\n",
        "surface.family",
        "muller-brown",
    ),
    (
        "expr_and_family",
        "[surface]\nfamily = \"muller-brown\"\nexpr = \"x\"\n[particle]\ndiffusion = 1.0\n",
        "surface",
        "exactly one",
    ),
    (
        "expr_syntax",
        "[surface]\nexpr = \"x^2 + * y\"\nx = [-1, 1]\ny = [-1, 1]\n[particle]\ndiffusion = 1.0\n",
        "surface.expr",
        "position",
    ),
    (
        "table_missing",
        "[surface]\ntable = \"nowhere.csv\"\n[particle]\ndiffusion = 1.0\n",
        "surface.table",
        "cannot read",
    ),
];

#[test]
fn bad_two_coordinate_scenarios_exit_2_naming_the_key() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("plane_bad_input");
    std::fs::create_dir_all(&dir).unwrap();
    let mut failures = Vec::new();
    let cases = CASES
        .iter()
        .map(|&(n, t, k, e)| (n, format!("{GOOD_SURFACE}{t}"), k, e))
        .chain(WHOLE.iter().map(|&(n, t, k, e)| {
            let t = if n == "beside_potential" {
                format!("{GOOD_SURFACE}{t}")
            } else {
                t.to_string()
            };
            (n, t, k, e)
        }));
    for (name, text, key, expect) in cases {
        let p = dir.join(format!("{name}.toml"));
        std::fs::write(&p, &text).unwrap();
        for cmd in ["survey", "rate"] {
            // survey does not use the product region
            if name == "start_in_product" && cmd == "survey" {
                continue;
            }
            let out = assert_cmd::Command::cargo_bin("escapade")
                .unwrap()
                .args([cmd, p.to_str().unwrap()])
                .output()
                .unwrap();
            let err = String::from_utf8_lossy(&out.stderr).to_string();
            let ok = out.status.code() == Some(2)
                && out.stdout.is_empty()
                && err.trim().lines().count() == 1
                && err.contains(&format!("{name}.toml"))
                && err.contains(key)
                && err.contains(expect)
                && !err.contains("panicked")
                && !err.contains("NaN");
            if !ok {
                failures.push(format!("{name} ({cmd}): {:?} {err}", out.status.code()));
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
