//! No silent wrong numbers or hangs: interrupted scans are marked, record files are checked and
//! locked, out-of-range settings are refused or capped with a message, bad scenario shapes are
//! errors, periodic profiles tilted either way are analysed, and implausible values are warned
//! about. Every expectation here is common practice, no source: these are checks of our own error
//! and status handling. Commands that could hang run under a timeout so the suite cannot hang.

mod common;

use assert_cmd::Command;
use escapade::scan::{self, SimStatus, Spec};
use escapade::simulate::{self, records};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Child, Output, Stdio};
use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

/// A double well (8 kT, γ/ω_b ≈ 0.7, reduced units), as tests/bad_input/good.toml.
const WELL: &str = "[particle]\nmass = 1.0\nfriction = 2.0\n[potential]\nfamily = \"double-well\"\nbarrier = 8.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n";

/// The same well with a brute-force ensemble far too long to finish during a test (about 1e10
/// steps), so a signal always arrives mid-run.
const SLOW: &str = "[particle]\nmass = 1.0\nfriction = 2.0\n[potential]\nfamily = \"double-well\"\nbarrier = 8.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n[simulation]\nmethod = \"brute-force\"\ntrajectories = 100000\nbudget_steps = 1e12\nseed = 3\n";

/// A fresh temporary directory for one test.
fn dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("escapade-nsf-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn write(d: &Path, name: &str, text: &str) -> PathBuf {
    let p = d.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn bin() -> PathBuf {
    assert_cmd::cargo::cargo_bin("escapade")
}

/// Runs the binary with `args`, killed after `secs` (a hang fails the test instead of the suite).
fn run(args: &[&str], secs: u64) -> Output {
    Command::new(bin())
        .env_remove("RUST_BACKTRACE")
        .args(args)
        .timeout(Duration::from_secs(secs))
        .output()
        .unwrap()
}

/// Asserts a user mistake: exit 2, nothing on stdout, exactly one line on stderr without a panic,
/// naming every `want`. Returns that line.
fn one_error_line(out: &Output, want: &[&str]) -> String {
    let stderr = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(2), "exit code; stderr: {stderr}");
    assert!(out.stdout.is_empty(), "stdout not empty");
    let body = stderr.strip_suffix('\n').unwrap_or(&stderr);
    assert!(
        !body.trim().is_empty() && !body.contains('\n') && !body.contains('\r'),
        "not one line: {stderr:?}"
    );
    assert!(!stderr.contains("panicked"), "{stderr}");
    for w in want {
        assert!(stderr.contains(w), "stderr lacks {w:?}: {stderr}");
    }
    stderr
}

/// Writes `scenario` as s.toml in a fresh directory `name`, runs `cmd s.toml args…` (under a
/// timeout) and asserts a user mistake whose one line names s.toml and every `want`.
fn refused(name: &str, scenario: &str, cmd: &str, args: &[&str], want: &[&str]) {
    let d = dir(name);
    let f = write(&d, "s.toml", scenario);
    let mut all = vec![cmd, f.to_str().unwrap()];
    all.extend_from_slice(args);
    one_error_line(&run(&all, 60), &[&["s.toml"], want].concat());
    let _ = std::fs::remove_dir_all(&d);
}

/// Sends SIGINT to a child, as Ctrl-C would.
fn sigint(child: &Child) {
    let ok = std::process::Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(ok.success());
}

/// Waits for a child at most `secs` seconds (killing it after that) and returns its output.
fn wait(mut child: Child, secs: u64) -> Output {
    let t0 = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if t0.elapsed() > Duration::from_secs(secs) {
            let _ = child.kill();
            panic!("the command did not finish within {secs} s");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    child.wait_with_output().unwrap()
}

fn spawn(args: &[&str]) -> Child {
    std::process::Command::new(bin())
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

fn lines(p: &Path) -> usize {
    std::fs::read_to_string(p).map_or(0, |t| t.lines().count())
}

// --- 1. interrupted scans ---

/// A scan whose stop flag is already set simulates nothing: every point says so, in the report,
/// the table, the CSV and the JSON, and no simulated rate is given.
#[test]
fn scan_stopped_marks_every_simulated_point_interrupted() {
    let d = dir("scan-stop");
    let f = write(&d, "s.toml", WELL);
    let spec = Spec {
        key: "particle.friction".into(),
        from: 1.0,
        to: 2.0,
        points: 3,
        log: false,
    };
    let stop = AtomicBool::new(true);
    let r = scan::run(
        &escapade::scenario::FileVariants {
            file: &f,
            base: &[],
        },
        &spec,
        true,
        1,
        &stop,
    )
    .unwrap();
    assert!(r.interrupted);
    for p in &r.points {
        assert!(p.simulation.is_none());
        assert_eq!(p.simulation_status, Some(SimStatus::Interrupted));
        // the theory is complete all the same
        assert!(p.rates.kramers.is_some());
    }
    // the simulated column of each row and the note (a narrow column may wrap the word)
    let table = escapade::report::table::scan(&r, false);
    assert_eq!(table.matches("interrupt").count(), 4, "{table}");
    assert!(table.contains("note: interrupted"), "{table}");
    let csv = escapade::report::csv::scan(&r);
    let head = csv.lines().next().unwrap();
    assert!(head.ends_with(",simulation_status"), "{head}");
    assert!(csv.lines().skip(1).all(|l| l.ends_with(",interrupted")));
    let json: Value = serde_json::from_str(&escapade::report::json::render(&r)).unwrap();
    assert_eq!(json["interrupted"], true);
    assert_eq!(json["points"][0]["simulation_status"], "interrupted");
    assert!(json["points"][0]["simulation"].is_null());
    let _ = std::fs::remove_dir_all(&d);
}

/// `scan --simulate` stopped by SIGINT exits 130, says "interrupted" on stderr and marks the
/// unfinished points (no partial simulated rate passes for a result).
#[test]
fn scan_simulate_sigint_exits_130_and_marks_points() {
    let d = dir("scan-sigint");
    let f = write(&d, "s.toml", SLOW);
    let csv = d.join("scan.csv");
    let child = spawn(&[
        "scan",
        f.to_str().unwrap(),
        "--vary",
        "particle.friction",
        "--from",
        "1",
        "--to",
        "2",
        "--points",
        "3",
        "--simulate",
        "--threads",
        "1",
        "--json",
        "--csv",
        csv.to_str().unwrap(),
    ]);
    std::thread::sleep(Duration::from_millis(1500));
    sigint(&child);
    let out = wait(child, 60);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(130), "{stderr}");
    assert!(
        stderr.lines().any(|l| l.contains("interrupted")),
        "{stderr}"
    );
    let json: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(json["interrupted"], true);
    let points = json["points"].as_array().unwrap();
    assert_eq!(points.len(), 3);
    // the first point's ensemble cannot finish in 1.5 s: it and every later one are unfinished
    for p in points {
        assert_eq!(p["simulation_status"], "interrupted", "{p}");
        assert!(p["simulation"].is_null());
    }
    let text = std::fs::read_to_string(&csv).unwrap();
    assert_eq!(
        text.lines().filter(|l| l.ends_with(",interrupted")).count(),
        3,
        "{text}"
    );
    let _ = std::fs::remove_dir_all(&d);
}

// --- 2. merge checks ---

const HEADER: &str = "# escapade trajectory records: one line per finished trajectory\n# fingerprint=00000000000000ab seed=1 trajectories=200 dt=0.01 max_steps=1000 dynamics=overdamped\nindex,steps,time,outcome\n";

#[test]
fn merge_refuses_an_index_outside_the_run() {
    let d = dir("merge-range");
    let f = write(
        &d,
        "r.csv",
        &format!("{HEADER}0,10,0.1,escaped\n999999,10,0.1,escaped\n"),
    );
    let out = run(&["merge", f.to_str().unwrap()], 30);
    one_error_line(&out, &["r.csv", "line 5", "999999", "200"]);
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn merge_refuses_a_trajectory_in_two_files_naming_the_line() {
    let d = dir("merge-dup");
    let a = write(&d, "a.csv", &format!("{HEADER}0,10,0.1,escaped\n"));
    let b = write(
        &d,
        "b.csv",
        &format!("{HEADER}1,10,0.1,escaped\n0,12,0.12,escaped\n"),
    );
    let out = run(&["merge", a.to_str().unwrap(), b.to_str().unwrap()], 30);
    one_error_line(&out, &["b.csv", "line 5", "a.csv"]);
    let _ = std::fs::remove_dir_all(&d);
}

// --- 3. one writer per record file ---

/// A record file open for a run is locked: a second run on it is refused, naming the file.
#[test]
fn second_writer_on_a_records_file_is_refused() {
    let d = dir("lock-lib");
    let (m, t) = common::model(WELL, &["simulation.trajectories=10"]);
    let plan = common::plan(&m, &t).unwrap();
    let rec = d.join("r.csv");
    let first = records::resume(&rec, &plan).unwrap();
    let e = records::resume(&rec, &plan).err().expect("refused");
    let msg = e.to_string();
    assert!(msg.contains("r.csv") && msg.contains("in use"), "{msg}");
    drop(first);
    // once the first writer is gone the file can be continued
    assert!(records::resume(&rec, &plan).is_ok());
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn two_processes_resuming_one_records_file_second_is_refused() {
    let d = dir("lock-cli");
    let f = write(&d, "s.toml", SLOW);
    let rec = d.join("r.csv");
    // no --quiet or --json: the refusal must come before any note, as the one line on stderr
    let args = [
        "simulate",
        f.to_str().unwrap(),
        "--threads",
        "1",
        "--records",
        rec.to_str().unwrap(),
        "--resume",
    ];
    let first = spawn(&args);
    let t0 = Instant::now();
    while lines(&rec) < 5 && t0.elapsed() < Duration::from_secs(60) {
        std::thread::sleep(Duration::from_millis(20));
    }
    let second = run(&args, 20);
    sigint(&first);
    let out = wait(first, 60);
    assert_eq!(out.status.code(), Some(130));
    one_error_line(&second, &["r.csv", "in use"]);
    let _ = std::fs::remove_dir_all(&d);
}

/// A record that cannot be written ends the run at once with one error line naming the file,
/// rather than after the whole ensemble (here about 1e10 steps). The file-size limit (bash's
/// `ulimit -f`, in KiB, with SIGXFSZ ignored so that the write fails with EFBIG) makes the writes
/// fail after about 2000 records.
#[test]
fn records_write_failure_stops_the_run_at_once() {
    let d = dir("write-fail");
    let f = write(&d, "s.toml", SLOW);
    let rec = d.join("r.csv");
    let script = format!(
        "trap '' XFSZ; ulimit -f 48; exec '{}' simulate '{}' --threads 1 --records '{}'",
        bin().display(),
        f.display(),
        rec.display()
    );
    let out = Command::new("bash")
        .args(["-c", &script])
        .timeout(Duration::from_secs(60))
        .output()
        .unwrap();
    one_error_line(
        &Output {
            // the note before the run is not part of the error
            stderr: String::from_utf8_lossy(&out.stderr)
                .lines()
                .filter(|l| !l.starts_with("simulating "))
                .map(|l| format!("{l}\n"))
                .collect::<String>()
                .into_bytes(),
            ..out
        },
        &["r.csv", "too large"],
    );
    let _ = std::fs::remove_dir_all(&d);
}

// --- 4. ranges: dt, threads, scan points ---

/// dt = 1e-320 would take forever (it used to hang in forward flux sampling): refused, naming
/// simulation.dt and the step estimate.
#[test]
fn tiny_dt_is_refused_naming_simulation_dt() {
    refused(
        "dt",
        WELL,
        "simulate",
        &[
            "--set",
            "simulation.dt=1e-320",
            "--set",
            "simulation.trajectories=10",
        ],
        &["simulation.dt", "steps", "budget_steps"],
    );
}

/// Reads the number before `after` in `s` (the last whitespace- or '('-separated token).
fn number_before(s: &str, after: &str) -> f64 {
    let head = &s[..s.find(after).unwrap_or_else(|| panic!("{after:?} in {s}"))];
    let tok = head
        .trim_end()
        .rsplit([' ', '('])
        .next()
        .unwrap()
        .trim_end_matches(',');
    tok.parse()
        .unwrap_or_else(|_| panic!("number {tok:?} in {s}"))
}

/// The cost message states N × T / dt: its numbers must multiply out to the cost it gives, also
/// when the horizon (max_time) is shorter than the expected escape time.
#[test]
fn cost_message_matches_its_formula() {
    for sets in [
        &["simulation.trajectories=500"][..],
        &["simulation.trajectories=500", "simulation.max_time=50"][..],
    ] {
        let (m, t) = common::model(WELL, sets);
        let plan = common::plan(&m, &t).unwrap();
        let s = &plan.method_reason;
        let cost = number_before(s, " steps (");
        let n = number_before(s, " trajectories ×");
        let time = number_before(s, " per trajectory");
        let dt = number_before(s, "; T =");
        // the message prints 3-4 significant digits: a product of three rounded numbers is within
        // about 1% of the rounded cost
        assert!(
            (n * time / dt / cost - 1.0).abs() < 1e-2,
            "{n} × {time} / {dt} vs {cost}: {s}"
        );
        assert!((cost / plan.expected_brute_steps - 1.0).abs() < 1e-2, "{s}");
    }
}

#[test]
fn huge_thread_count_is_capped_with_a_warning() {
    let d = dir("threads");
    let f = write(&d, "s.toml", WELL);
    let out = run(
        &[
            "simulate",
            f.to_str().unwrap(),
            "--json",
            "--threads",
            "100000",
            "--set",
            "simulation.trajectories=20",
        ],
        60,
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let json: Value = serde_json::from_slice(&out.stdout).unwrap();
    let cap = 4 * std::thread::available_parallelism().map_or(1, std::num::NonZero::get);
    assert_eq!(json["simulation"]["threads"], cap as u64);
    let warnings = json["simulation"]["warnings"].to_string();
    assert!(
        warnings.contains("--threads 100000") && warnings.contains(&format!("{cap}")),
        "{warnings}"
    );
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn huge_scan_point_count_is_refused() {
    let d = dir("points");
    let f = write(&d, "s.toml", WELL);
    for n in ["1000000000", "100000000000000"] {
        let out = run(
            &[
                "scan",
                f.to_str().unwrap(),
                "--vary",
                "particle.friction",
                "--from",
                "1",
                "--to",
                "2",
                "--points",
                n,
            ],
            30,
        );
        one_error_line(&out, &["--points", n, &scan::MAX_POINTS.to_string()]);
    }
    let _ = std::fs::remove_dir_all(&d);
}

// --- 5. scenario shapes ---

#[test]
fn domain_with_three_values_is_refused() {
    refused(
        "domain3",
        "[particle]\nmass = 1.0\nfriction = 2.0\n[potential]\nexpr = \"8*(x^2 - 1)^2\"\ndomain = [-2, 2, 3]\n",
        "survey",
        &[],
        &["potential.domain", "3 values"],
    );
}

#[test]
fn constants_beside_a_family_are_refused() {
    refused(
        "famconst",
        &format!("{WELL}[potential.constants]\na = 3\n"),
        "survey",
        &[],
        &["potential.constants", "family"],
    );
}

// --- 6. records path that is a directory ---

#[test]
fn records_path_that_is_a_directory_says_so() {
    let d = dir("recdir");
    let f = write(&d, "s.toml", WELL);
    for resume in [false, true] {
        let mut args = vec![
            "simulate",
            f.to_str().unwrap(),
            "--set",
            "simulation.trajectories=10",
            "--records",
            d.to_str().unwrap(),
        ];
        if resume {
            args.push("--resume");
        }
        let out = run(&args, 30);
        let line = one_error_line(&out, &["is a directory"]);
        assert!(!line.contains("use --resume"), "{line}");
    }
    let _ = std::fs::remove_dir_all(&d);
}

// --- 7. periodic profiles tilted to the left ---

/// U = −A cos(2πx/L) − F x is mirrored by x → −x, F → −F: the analysis at F = −6 must be that of
/// F = +6 with forward and backward exchanged (a symmetry, no source needed). The integrals are
/// converged to ~1e-11 (quad.rs), so 1e-8 relative is far above the numerical noise.
#[test]
fn washboard_tilted_left_mirrors_the_right_tilt() {
    let ex = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/hopping_washboard.toml");
    let ex = ex.to_str().unwrap();
    let right = common::json(&["rate", ex, "--json", "--set", "potential.tilt=6"]);
    let left = common::json(&["rate", ex, "--json", "--set", "potential.tilt=-6"]);
    let close = |a: &Value, b: &Value| {
        let (a, b) = (a.as_f64().unwrap(), b.as_f64().unwrap());
        assert!((a - b).abs() <= 1e-8 * a.abs().max(b.abs()), "{a} vs {b}");
    };
    let (hr, hl) = (&right["periodic"]["hopping"], &left["periodic"]["hopping"]);
    close(&hr["forward"], &hl["backward"]);
    close(&hr["backward"], &hl["forward"]);
    close(
        &right["periodic"]["drift"],
        &Value::from(-left["periodic"]["drift"].as_f64().unwrap()),
    );
    close(
        &right["landscape"]["barrier_height_kT"],
        &left["landscape"]["barrier_height_kT"],
    );
    for k in ["kramers", "mfpt", "turnover"] {
        close(&right["rates"][k], &left["rates"][k]);
    }
}

// --- 8. merge takes --quiet and shows units ---

#[test]
fn merge_takes_quiet_and_shows_time_units() {
    let d = dir("merge-units");
    let f = write(
        &d,
        "s.toml",
        &format!(
            "[units]\nenergy = \"kT\"\nlength = \"nm\"\ntime = \"ps\"\nmass = \"amu\"\ntemperature = 300\n{WELL}"
        ),
    );
    let rec = d.join("r.csv");
    let out = run(
        &[
            "simulate",
            f.to_str().unwrap(),
            "--quiet",
            "--set",
            "simulation.trajectories=20",
            "--records",
            rec.to_str().unwrap(),
        ],
        60,
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = run(&["merge", "--quiet", rec.to_str().unwrap()], 30);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let table = String::from_utf8_lossy(&out.stdout);
    assert!(table.contains("1/ps"), "{table}");
    assert!(table.contains("dt = ") && table.contains(" ps"), "{table}");
    let json: Value =
        serde_json::from_slice(&run(&["merge", "--json", rec.to_str().unwrap()], 30).stdout)
            .unwrap();
    assert_eq!(json["time_unit"], "ps");
    let _ = std::fs::remove_dir_all(&d);
}

// --- 9. implausible values ---

/// γ = 1e12 in a scenario with ω_b ≈ 4 (reduced units) is what typing 1/s where 1/ps was meant
/// gives: the result stands but a warning names the key.
#[test]
fn implausible_friction_is_warned() {
    let d = dir("friction");
    let f = write(&d, "s.toml", WELL);
    let json = common::json(&[
        "rate",
        f.to_str().unwrap(),
        "--json",
        "--set",
        "particle.friction=1e12",
    ]);
    let w = json["regime"]["warnings"].to_string();
    assert!(
        w.contains("particle.friction") && w.contains("implausible"),
        "{w}"
    );
    let table = String::from_utf8_lossy(
        &run(
            &[
                "rate",
                f.to_str().unwrap(),
                "--set",
                "particle.friction=1e12",
            ],
            30,
        )
        .stdout,
    )
    .to_string();
    assert!(table.contains("particle.friction"), "{table}");
    // the ordinary friction of the same scenario gives no such warning
    let json = common::json(&["rate", f.to_str().unwrap(), "--json"]);
    assert!(
        !json["regime"]["warnings"]
            .to_string()
            .contains("implausible")
    );
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn implausible_temperature_and_barrier_are_warned() {
    let d = dir("temp");
    let f = write(
        &d,
        "s.toml",
        "[units]\nenergy = \"kJ/mol\"\nlength = \"nm\"\ntime = \"ps\"\nmass = \"amu\"\ntemperature = 0.5\n[particle]\nmass = 10.0\nfriction = 5.0\n[potential]\nfamily = \"double-well\"\nbarrier = 8.0\nhalf_width = 0.1\n",
    );
    let json = common::json(&["rate", f.to_str().unwrap(), "--json"]);
    let w = json["regime"]["warnings"].to_string();
    // 8 kJ/mol at 0.5 K is about 1900 kT
    assert!(w.contains("units.temperature"), "{w}");
    assert!(w.contains("1000 kT"), "{w}");
    let _ = std::fs::remove_dir_all(&d);
}

/// Threads cap (case 4) as a library function: the cap is 4 × the available cores.
#[test]
fn thread_cap_is_four_times_the_cores() {
    let cores = std::thread::available_parallelism().map_or(1, std::num::NonZero::get);
    assert_eq!(simulate::effective_threads(0).0, cores);
    assert_eq!(simulate::effective_threads(1).0, 1);
    assert!(simulate::effective_threads(1).1.is_none());
    let (n, w) = simulate::effective_threads(100_000);
    assert_eq!(n, 4 * cores);
    assert!(w.unwrap().contains("--threads 100000"));
}
