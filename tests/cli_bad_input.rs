//! Bad-input corpus for the `escapade` binary.
//!
//! Every case below is a user mistake: a broken scenario file or table under `tests/bad_input/`,
//! or a bad command line. For each one the binary must
//! - exit with code 2,
//! - print nothing on stdout,
//! - print exactly one non-empty line on stderr, with no panic text ("panicked", "RUST_BACKTRACE"),
//! - name where the mistake is (the scenario file, the table file, or the offending argument), and
//! - contain the expected substrings, which name the line ("line 3"), the key
//!   ("particle.friction") or the formula position ("position 7").
//!
//! The expectations are common practice, no source: they are checks of our own error handling,
//! not values taken from any reference. All cases run in one test, which collects every failure
//! and reports them together.

use std::path::PathBuf;
use std::time::Duration;

/// One bad input.
struct Case {
    /// the subcommand ("rate", "survey", "observe", ...)
    cmd: &'static str,
    /// scenario file under tests/bad_input ("" for none)
    file: &'static str,
    /// further arguments after the file
    args: &'static [&'static str],
    /// what stderr must name as the place of the mistake; "" means the scenario file name
    names: &'static str,
    /// expected substring (the line, key or position)
    expect: &'static str,
    /// a second expected substring, or ""
    expect2: &'static str,
}

const fn case(
    cmd: &'static str,
    file: &'static str,
    expect: &'static str,
    expect2: &'static str,
) -> Case {
    Case {
        cmd,
        file,
        args: &[],
        names: "",
        expect,
        expect2,
    }
}

/// A table problem: stderr must name the table file.
const fn table(
    cmd: &'static str,
    file: &'static str,
    csv: &'static str,
    expect: &'static str,
    expect2: &'static str,
) -> Case {
    Case {
        cmd,
        file,
        args: &[],
        names: csv,
        expect,
        expect2,
    }
}

/// A case with extra arguments; `names` as in [`Case::names`].
const fn with_args(
    cmd: &'static str,
    file: &'static str,
    args: &'static [&'static str],
    names: &'static str,
    expect: &'static str,
    expect2: &'static str,
) -> Case {
    Case {
        cmd,
        file,
        args,
        names,
        expect,
        expect2,
    }
}

const CASES: &[Case] = &[
    // --- TOML syntax and structure ---
    case("rate", "toml_syntax.toml", "line 3", "particle.friction"),
    case("survey", "unknown_key_units.toml", "line 3", "units.enrgy"),
    case(
        "rate",
        "unknown_key_particle.toml",
        "line 4",
        "particle.frction",
    ),
    case(
        "survey",
        "unknown_key_potential.toml",
        "line 8",
        "potential.height",
    ),
    case(
        "rate",
        "unknown_key_states.toml",
        "line 10",
        "states.finish",
    ),
    case("survey", "unknown_key_top.toml", "line 2", "key author"),
    case(
        "rate",
        "missing_particle.toml",
        "particle: the [particle] section is required",
        "",
    ),
    case(
        "survey",
        "missing_potential.toml",
        "potential: the [potential] section is required",
        "",
    ),
    case("rate", "wrong_type_string.toml", "line 2", "particle.mass"),
    case("survey", "nonutf8_scenario.toml", "line 3", "not UTF-8"),
    // --- [units] ---
    case(
        "rate",
        "temperature_negative.toml",
        "units.temperature",
        "got -300",
    ),
    case(
        "survey",
        "temperature_zero.toml",
        "units.temperature",
        "got 0",
    ),
    case(
        "rate",
        "unit_energy_unknown.toml",
        "units.energy",
        "\"kcal\"",
    ),
    case(
        "survey",
        "unit_length_unknown.toml",
        "units.length",
        "\"furlong\"",
    ),
    case(
        "rate",
        "unit_time_unknown.toml",
        "units.time",
        "\"fortnight\"",
    ),
    case(
        "survey",
        "unit_mass_unknown.toml",
        "units.mass",
        "\"stone\"",
    ),
    case(
        "rate",
        "energy_without_temperature.toml",
        "units.temperature",
        "the energy unit is not kT",
    ),
    // a unit name with a newline must not break the one-line message
    case(
        "survey",
        "unit_newline.toml",
        "units.energy",
        "unknown energy unit",
    ),
    // --- [particle] ---
    case(
        "rate",
        "friction_zero.toml",
        "particle.friction",
        "must be a positive number",
    ),
    case(
        "survey",
        "mass_negative.toml",
        "particle.mass",
        "must be a positive number",
    ),
    case(
        "rate",
        "diffusion_zero.toml",
        "particle.diffusion",
        "must be a positive number",
    ),
    case(
        "survey",
        "diffusion_negative.toml",
        "particle.diffusion",
        "must be a positive number",
    ),
    case(
        "rate",
        "friction_and_diffusion.toml",
        "particle.diffusion",
        "not both",
    ),
    case(
        "survey",
        "friction_without_mass.toml",
        "particle.mass",
        "is required with particle.friction",
    ),
    case(
        "rate",
        "diffusion_expr_negative.toml",
        "particle.diffusion_expr",
        "must be finite and positive",
    ),
    case(
        "survey",
        "diffusion_expr_with_friction.toml",
        "particle.diffusion_expr",
        "drop particle.friction",
    ),
    // an absurd but positive mass must be rejected (or handled), not panic
    case("rate", "mass_huge.toml", "particle.mass", ""),
    // --- [potential]: families ---
    case(
        "survey",
        "family_unknown.toml",
        "potential.family",
        "\"quartic\"",
    ),
    case(
        "rate",
        "family_missing_param.toml",
        "potential.half_width",
        "is required",
    ),
    case(
        "survey",
        "family_missing_period.toml",
        "potential.period",
        "is required",
    ),
    case(
        "rate",
        "family_foreign_param.toml",
        "potential.period",
        "is not a parameter of the double-well family",
    ),
    // a family name with a newline must not break the one-line message
    case(
        "survey",
        "family_newline.toml",
        "potential.family",
        "unknown family",
    ),
    // --- [potential]: formulas and domains ---
    case("rate", "expr_syntax.toml", "potential.expr", "position 11"),
    case(
        "survey",
        "expr_unknown_name.toml",
        "position 9",
        "unknown name \"y\"",
    ),
    case(
        "rate",
        "expr_unbalanced_open.toml",
        "position 17",
        "close the '(' at position 15",
    ),
    case(
        "survey",
        "expr_unbalanced_close.toml",
        "position 10",
        "unmatched ')'",
    ),
    case(
        "rate",
        "expr_no_domain.toml",
        "potential.domain",
        "is required with potential.expr",
    ),
    case(
        "survey",
        "domain_reversed.toml",
        "potential.domain",
        "lo < hi",
    ),
    case("rate", "domain_empty.toml", "potential.domain", "lo < hi"),
    case(
        "survey",
        "constant_nan.toml",
        "potential.constants.a",
        "must be finite",
    ),
    case(
        "rate",
        "two_potentials.toml",
        "potential: give exactly one of expr, table or family",
        "2 given",
    ),
    case(
        "survey",
        "expr_and_table.toml",
        "potential: give exactly one of expr, table or family",
        "2 given",
    ),
    // --- [potential]: tables ---
    table(
        "survey",
        "table_empty.toml",
        "table_empty.csv",
        "potential.table",
        "0 data rows",
    ),
    table(
        "rate",
        "table_header_only.toml",
        "table_header_only.csv",
        "potential.table",
        "0 data rows",
    ),
    table(
        "survey",
        "table_one_column.toml",
        "table_one_column.csv",
        "line 1",
        "one column only",
    ),
    table(
        "rate",
        "table_non_numeric.toml",
        "table_non_numeric.csv",
        "line 5",
        "\"zero\" is not a number",
    ),
    table(
        "survey",
        "table_nan.toml",
        "table_nan.csv",
        "line 3",
        "NaN or infinite",
    ),
    table(
        "rate",
        "table_inf.toml",
        "table_inf.csv",
        "line 4",
        "NaN or infinite",
    ),
    table(
        "survey",
        "table_unsorted.toml",
        "table_unsorted.csv",
        "line 5",
        "sorted by increasing x",
    ),
    table(
        "rate",
        "table_duplicate.toml",
        "table_duplicate.csv",
        "line 5",
        "duplicate x",
    ),
    table(
        "survey",
        "table_ragged.toml",
        "table_ragged.csv",
        "line 3",
        "3 fields, expected 2",
    ),
    table(
        "rate",
        "table_three_rows.toml",
        "table_three_rows.csv",
        "potential.table",
        "3 data rows",
    ),
    table(
        "survey",
        "table_non_utf8.toml",
        "table_non_utf8.csv",
        "line 5",
        "not UTF-8",
    ),
    table(
        "rate",
        "table_missing.toml",
        "table_missing.csv",
        "potential.table",
        "cannot read",
    ),
    table(
        "survey",
        "table_negative_sigma.toml",
        "table_negative_sigma.csv",
        "line 4",
        "sigma_U is negative",
    ),
    table(
        "rate",
        "table_d_nonpositive.toml",
        "table_d_nonpositive.csv",
        "line 5",
        "D must be positive",
    ),
    // --- landscape ---
    case(
        "survey",
        "target_outside.toml",
        "states.target",
        "outside the domain",
    ),
    case(
        "rate",
        "target_inside_well.toml",
        "states.target",
        "no barrier",
    ),
    case(
        "survey",
        "no_minimum.toml",
        "potential:",
        "no minimum inside the domain",
    ),
    case("rate", "pole.toml", "potential:", "not finite"),
    case("survey", "nan_in_domain.toml", "potential:", "not finite"),
    case(
        "rate",
        "unbounded_below.toml",
        "potential:",
        "unbounded below",
    ),
    // a pole between two scan points must be found as well
    case("rate", "pole_offgrid.toml", "potential:", "not finite"),
    // --- [simulation] ---
    case(
        "survey",
        "simulation_method_unknown.toml",
        "simulation.method",
        "unknown variant `metropolis`",
    ),
    // --- command line ---
    with_args(
        "rate",
        "friction_zero.toml",
        &["--json"],
        "",
        "particle.friction",
        "must be a positive number",
    ),
    with_args(
        "rate",
        "good.toml",
        &["--set", "particle.friction"],
        "--set particle.friction",
        "expected section.key=value",
        "",
    ),
    with_args(
        "survey",
        "good.toml",
        &["--set", "particle.frction=3"],
        "--set particle.frction=3",
        "unknown field `frction`",
        "",
    ),
    with_args(
        "rate",
        "good.toml",
        &["--set", "particle.mass=heavy"],
        "--set particle.mass=heavy",
        "cannot read \"heavy\" as a quantity",
        "",
    ),
    // the fit of noisy tables and the significance threshold
    with_args(
        "survey",
        "table_sigma.toml",
        &["--set", "potential.noise=0.1"],
        "",
        "potential.noise",
        "drop potential.noise",
    ),
    with_args(
        "survey",
        "table_sigma.toml",
        &["--set", "potential.fit=\"spline\""],
        "",
        "potential.fit",
        "unknown fit",
    ),
    with_args(
        "survey",
        "table_exact.toml",
        &["--set", "potential.fit=\"chi-square\""],
        "",
        "potential.fit",
        "standard errors",
    ),
    with_args(
        "survey",
        "table_sigma.toml",
        &["--set", "potential.prominence=-1"],
        "",
        "potential.prominence",
        "must be a finite energy",
    ),
    with_args(
        "survey",
        "good.toml",
        &["--set", "potential.prominence=1"],
        "",
        "potential.prominence",
        "applies to table potentials only",
    ),
    // with several --set, the message must name the one that is wrong (and only that one)
    with_args(
        "rate",
        "good.toml",
        &[
            "--set",
            "particle.friction=3",
            "--set",
            "particle.mass=heavy",
        ],
        "--set particle.mass=heavy:",
        "cannot read \"heavy\" as a quantity",
        "",
    ),
    with_args(
        "survey",
        "good.toml",
        &["--set", "potential.barrier.height=1"],
        "--set potential.barrier.height=1",
        "\"barrier\" is a value, not a section",
        "",
    ),
    with_args(
        "rate",
        "good.toml",
        &["--set", "potential.barrier=-1"],
        "",
        "potential.barrier",
        "must be a positive number",
    ),
    case("rate", "does_not_exist.toml", "cannot read", ""),
    with_args(
        "survey",
        "good.toml",
        &["--frobnicate"],
        "--frobnicate",
        "unexpected argument",
        "",
    ),
    case("rate", "target_on_wall.toml", "states.target", "domain end"),
    // --- periodic profiles, profile uncertainty, well-to-well and memory runs ---
    case(
        "rate",
        "periodic_not_periodic.toml",
        "potential.periodic",
        "the profile is not periodic",
    ),
    case(
        "survey",
        "periodic_too_long.toml",
        "potential.periodic",
        "longer than the domain",
    ),
    with_args(
        "rate",
        "good.toml",
        &["--set", "potential.periodic=2"],
        "",
        "potential.periodic",
        "expr and table",
    ),
    with_args(
        "rate",
        "good.toml",
        &["--set", "uncertainty.draws=100"],
        "",
        "uncertainty",
        "sigma_U column",
    ),
    case(
        "rate",
        "uncertainty_few_draws.toml",
        "uncertainty.draws",
        "at least 40",
    ),
    with_args(
        "rate",
        "good.toml",
        &["--set", "simulation.transitions=0"],
        "",
        "simulation.transitions",
        "at least 1",
    ),
    with_args(
        "simulate",
        "good.toml",
        &[
            "--set",
            "particle.memory_time=0.5",
            "--set",
            "simulation.dynamics=overdamped",
        ],
        "",
        "simulation.dynamics",
        "memory",
    ),
    // --- observe: trajectory files and its options ---
    case("observe", "traj_non_numeric.csv", "line 4", "not a number"),
    case(
        "observe",
        "traj_time_backwards.txt",
        "line 5",
        "does not increase",
    ),
    with_args(
        "observe",
        "traj_non_numeric.csv",
        &["--cores", "1:2"],
        "--cores 1:2",
        "LO:HI,LO:HI",
        "",
    ),
    // no scenario file at all: the message must say which argument is missing
    with_args("survey", "", &[], "<FILE>", "required", ""),
];

fn bad_input(file: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("bad_input")
        .join(file)
}

/// Runs one case; returns a description of everything wrong with the output.
fn check(c: &Case) -> Vec<String> {
    let mut cmd = assert_cmd::Command::cargo_bin("escapade").expect("binary escapade");
    cmd.env_remove("RUST_BACKTRACE")
        .env_remove("RUST_LIB_BACKTRACE")
        .timeout(Duration::from_secs(120))
        .arg(c.cmd);
    if !c.file.is_empty() {
        cmd.arg(bad_input(c.file));
    }
    cmd.args(c.args);
    let out = match cmd.output() {
        Ok(o) => o,
        Err(e) => return vec![format!("could not run: {e}")],
    };
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    let mut problems = Vec::new();
    if out.status.code() != Some(2) {
        problems.push(format!("exit code {:?}, expected 2", out.status.code()));
    }
    if !stdout.is_empty() {
        problems.push(format!("stdout not empty ({} bytes)", stdout.len()));
    }
    let body = stderr.strip_suffix('\n').unwrap_or(&stderr);
    if body.trim().is_empty() || body.contains('\n') || body.contains('\r') {
        problems.push(format!(
            "stderr is not exactly one non-empty line ({} lines)",
            stderr.lines().count()
        ));
    }
    for bad in ["panicked", "RUST_BACKTRACE"] {
        if stderr.contains(bad) {
            problems.push(format!("stderr contains \"{bad}\""));
        }
    }
    let names = if c.names.is_empty() { c.file } else { c.names };
    for want in [names, c.expect, c.expect2] {
        if !want.is_empty() && !stderr.contains(want) {
            problems.push(format!("stderr lacks \"{want}\""));
        }
    }
    if !problems.is_empty() {
        problems.push(format!("stderr was: {stderr:?}"));
    }
    problems
}

#[test]
fn every_bad_input_is_one_line_with_exit_code_2() {
    assert!(
        CASES.len() >= 35,
        "the corpus shrank to {} cases",
        CASES.len()
    );
    let mut failures = Vec::new();
    for c in CASES {
        let problems = check(c);
        if !problems.is_empty() {
            let what = format!("escapade {} {} {}", c.cmd, c.file, c.args.join(" "));
            failures.push(format!("{}:\n    {}", what.trim(), problems.join("\n    ")));
        }
    }
    assert!(
        failures.is_empty(),
        "{} of {} bad-input cases failed:\n{}",
        failures.len(),
        CASES.len(),
        failures.join("\n")
    );
}
