//! Long-run handling through the binary: Ctrl-C (SIGINT) during `simulate --records` stops cleanly
//! with every finished record on disk, `--resume` completes to the numbers of one uninterrupted
//! run, and three shards merged give the same numbers too (common practice, no source).

use assert_cmd::Command;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

const SCENARIO: &str = "[particle]\nmass = 1.0\nfriction = 0.5\n[potential]\nfamily = \"double-well\"\nbarrier = 7.0\nhalf_width = 1.0\n[states]\nstart = -1.0\n[simulation]\ntrajectories = 3000\nseed = 77\n";

fn dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("escapade-cli-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn bin() -> PathBuf {
    assert_cmd::cargo::cargo_bin("escapade")
}

fn sim_json(args: &[&str]) -> Value {
    let out = Command::new(bin()).args(args).output().unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn lines(p: &Path) -> usize {
    std::fs::read_to_string(p).map_or(0, |t| t.lines().count())
}

#[test]
fn sigint_then_resume_equals_one_run_and_shards_merge_to_it() {
    let d = dir("runs");
    let scen = d.join("s.toml");
    std::fs::write(&scen, SCENARIO).unwrap();
    let scen = scen.to_str().unwrap();
    let whole = sim_json(&["simulate", scen, "--json", "--quiet", "--threads", "2"]);
    let want = &whole["simulation"];

    // interrupted run: wait until some records are on disk, then SIGINT
    let rec = d.join("rec.csv");
    let child = std::process::Command::new(bin())
        .args([
            "simulate",
            scen,
            "--json",
            "--quiet",
            "--threads",
            "1",
            "--records",
        ])
        .arg(&rec)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let t0 = Instant::now();
    while lines(&rec) < 100 && t0.elapsed() < Duration::from_secs(60) {
        std::thread::sleep(Duration::from_millis(20));
    }
    let killed = std::process::Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(killed.success());
    let out = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(!stderr.contains("panicked"), "{stderr}");
    let partial: Value = serde_json::from_slice(&out.stdout).unwrap();
    if partial["simulation"]["interrupted"] == true {
        assert_eq!(out.status.code(), Some(130));
        let finished = partial["simulation"]["finished"].as_u64().unwrap();
        assert!(finished < 3000);
        // every finished trajectory is on disk, whole lines only
        let text = std::fs::read_to_string(&rec).unwrap();
        assert!(text.ends_with('\n'));
        let records = text
            .lines()
            .filter(|l| l.ends_with("escaped") || l.ends_with("censored"))
            .count() as u64;
        assert_eq!(records, finished);
    } else {
        // the machine was fast enough to finish first: the resume below has nothing to do
        assert!(out.status.success());
    }
    let rec_s = rec.to_str().unwrap();
    let resumed = sim_json(&[
        "simulate",
        scen,
        "--json",
        "--quiet",
        "--records",
        rec_s,
        "--resume",
    ]);
    let got = &resumed["simulation"];
    for k in [
        "escaped",
        "censored",
        "total_steps",
        "rate",
        "mfpt",
        "rate_ci95",
    ] {
        assert_eq!(got[k], want[k], "resumed {k}");
    }

    // three shards, merged
    let mut parts = Vec::new();
    for k in 1..=3 {
        let p = d.join(format!("part{k}.csv"));
        let shard = format!("{k}/3");
        sim_json(&[
            "simulate",
            scen,
            "--json",
            "--quiet",
            "--shard",
            &shard,
            "--records",
            p.to_str().unwrap(),
        ]);
        parts.push(p);
    }
    let mut args = vec!["merge".to_string(), "--json".to_string()];
    args.extend(parts.iter().map(|p| p.to_str().unwrap().to_string()));
    let merged = sim_json(&args.iter().map(String::as_str).collect::<Vec<_>>());
    assert_eq!(merged["complete"], true);
    for k in [
        "escaped",
        "censored",
        "total_steps",
        "rate",
        "mfpt",
        "rate_ci95",
    ] {
        assert_eq!(merged["summary"][k], want[k], "merged {k}");
    }
    // merging a shard with itself is refused with one line and exit 2
    let out = Command::new(bin())
        .args(["merge"])
        .arg(&parts[0])
        .arg(&parts[0])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(
        String::from_utf8_lossy(&out.stderr).trim().lines().count(),
        1
    );
    let _ = std::fs::remove_dir_all(&d);
}
