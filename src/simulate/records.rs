//! Record files: one CSV line per finished trajectory (index, steps, time, outcome), appended and
//! flushed as each trajectory completes, under a header that carries the run's fingerprint so that
//! `--resume` and `merge` refuse files from another scenario. A torn last line (a write cut off by a
//! kill) is discarded with a warning; any other malformed line is an error naming its line, and
//! so is a record outside the run (an index beyond its ensemble, steps beyond its horizon).
//!
//! A file open for writing holds an advisory exclusive lock (`File::try_lock`, flock on Unix) for
//! as long as the run lasts, so a second run resuming the same file is refused instead of
//! recording every trajectory twice.

use super::{Dynamics, Plan};
use crate::stats::Outcome;
use std::collections::BTreeMap;
use std::fs::{File, OpenOptions};
use std::io::{BufWriter, Write};
use std::path::Path;
use thiserror::Error;

/// Record-file problems.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum RecordError {
    /// Reading or writing failed.
    #[error("{path}: {message}")]
    Io {
        /// file
        path: String,
        /// OS message
        message: String,
    },
    /// A malformed line.
    #[error("{path}: line {line}: {message}")]
    Format {
        /// file
        path: String,
        /// 1-based line
        line: usize,
        /// what is wrong
        message: String,
    },
    /// Files from different runs.
    #[error("{path}: {message}")]
    Mismatch {
        /// file
        path: String,
        /// what differs
        message: String,
    },
}

/// What a record file's header says.
#[derive(Debug, Clone, PartialEq)]
pub struct Header {
    /// run fingerprint (hex)
    pub fingerprint: u64,
    /// master seed
    pub seed: u64,
    /// ensemble size of the whole run
    pub trajectories: u64,
    /// time step (time units)
    pub dt: f64,
    /// horizon in steps
    pub max_steps: u64,
    /// dynamics name
    pub dynamics: String,
    /// the scenario's time unit ("1" reduced; `None` in files written before it was recorded)
    pub time_unit: Option<String>,
}

impl Header {
    /// The header of a plan.
    pub fn of(plan: &Plan) -> Self {
        Self {
            fingerprint: plan.fingerprint,
            seed: plan.params.seed,
            trajectories: plan.trajectories,
            dt: plan.params.dt,
            max_steps: plan.params.max_steps,
            dynamics: match plan.dynamics {
                Dynamics::Underdamped => "underdamped".into(),
                Dynamics::Overdamped => "overdamped".into(),
            },
            time_unit: Some(plan.time_unit.clone()),
        }
    }

    fn text(&self) -> String {
        // a unit name is one token in the header (names never hold spaces; this keeps it so)
        let unit = self
            .time_unit
            .as_ref()
            .map(|u| format!(" time_unit={}", u.replace(char::is_whitespace, "_")))
            .unwrap_or_default();
        format!(
            "# escapade trajectory records: one line per finished trajectory\n# fingerprint={:016x} seed={} trajectories={} dt={:?} max_steps={} dynamics={}{unit}\nindex,steps,time,outcome\n",
            self.fingerprint, self.seed, self.trajectories, self.dt, self.max_steps, self.dynamics
        )
    }
}

fn io(path: &Path, e: impl std::fmt::Display) -> RecordError {
    RecordError::Io {
        path: path.display().to_string(),
        message: e.to_string(),
    }
}

/// An open record file.
pub struct Writer {
    out: BufWriter<File>,
    dt: f64,
    path: String,
}

impl Writer {
    /// Appends one record as a whole line and flushes it.
    ///
    /// # Errors
    /// The write failed.
    pub fn append(&mut self, o: &Outcome) -> Result<(), RecordError> {
        let line = format!(
            "{},{},{:?},{}\n",
            o.index,
            o.steps,
            o.steps as f64 * self.dt,
            if o.escaped { "escaped" } else { "censored" }
        );
        self.out
            .write_all(line.as_bytes())
            .and_then(|()| self.out.flush())
            .map_err(|e| RecordError::Io {
                path: self.path.clone(),
                message: e.to_string(),
            })
    }
}

/// A record file as read.
#[derive(Debug, Clone)]
pub struct Contents {
    /// its header
    pub header: Header,
    /// its records
    pub outcomes: Vec<Outcome>,
    /// the 1-based line of each record, by index (after a merge: in the file that holds it)
    pub lines: BTreeMap<u64, usize>,
    /// byte length of the whole lines (a torn tail is beyond it)
    pub valid_len: usize,
    /// warnings (a discarded torn line)
    pub warnings: Vec<String>,
}

fn parse_header(path: &Path, line_no: usize, line: &str) -> Result<Header, RecordError> {
    let bad = |m: &str| RecordError::Format {
        path: path.display().to_string(),
        line: line_no,
        message: m.to_string(),
    };
    let mut fp = None;
    let (mut seed, mut n, mut dt, mut ms, mut dy, mut tu) = (None, None, None, None, None, None);
    for tok in line.trim_start_matches('#').split_whitespace() {
        let Some((k, v)) = tok.split_once('=') else {
            continue;
        };
        match k {
            "fingerprint" => fp = u64::from_str_radix(v, 16).ok(),
            "seed" => seed = v.parse().ok(),
            "trajectories" => n = v.parse().ok(),
            "dt" => dt = v.parse().ok(),
            "max_steps" => ms = v.parse().ok(),
            "dynamics" => dy = Some(v.to_string()),
            "time_unit" => tu = Some(v.to_string()),
            _ => {}
        }
    }
    Ok(Header {
        fingerprint: fp.ok_or_else(|| bad("header without a fingerprint"))?,
        seed: seed.ok_or_else(|| bad("header without a seed"))?,
        trajectories: n.ok_or_else(|| bad("header without trajectories"))?,
        dt: dt.ok_or_else(|| bad("header without dt"))?,
        max_steps: ms.ok_or_else(|| bad("header without max_steps"))?,
        dynamics: dy.ok_or_else(|| bad("header without dynamics"))?,
        time_unit: tu,
    })
}

/// Reads a record file.
///
/// # Errors
/// Unreadable file, missing header, malformed or duplicate lines.
pub fn read(path: &Path) -> Result<Contents, RecordError> {
    let bytes = std::fs::read(path).map_err(|e| io(path, e))?;
    let text = String::from_utf8_lossy(&bytes);
    let whole = text.rfind('\n').map_or(0, |i| i + 1);
    let mut warnings = Vec::new();
    if whole < text.len() {
        warnings.push(format!(
            "{}: discarded a torn last line (a write cut off mid-line)",
            path.display()
        ));
    }
    let mut header = None;
    let mut outcomes = Vec::new();
    let mut lines = BTreeMap::new();
    for (i, line) in text[..whole].lines().enumerate() {
        let line_no = i + 1;
        let t = line.trim();
        if t.is_empty() || t.starts_with("index,") {
            continue;
        }
        if t.starts_with('#') {
            if t.contains("fingerprint=") {
                header = Some(parse_header(path, line_no, t)?);
            }
            continue;
        }
        let bad = |m: String| RecordError::Format {
            path: path.display().to_string(),
            line: line_no,
            message: m,
        };
        let f: Vec<&str> = t.split(',').collect();
        if f.len() != 4 {
            return Err(bad(format!("{} fields, expected 4", f.len())));
        }
        let index: u64 = f[0].parse().map_err(|_| bad(format!("index {:?}", f[0])))?;
        let steps: u64 = f[1].parse().map_err(|_| bad(format!("steps {:?}", f[1])))?;
        let escaped = match f[3] {
            "escaped" => true,
            "censored" => false,
            other => return Err(bad(format!("outcome {other:?} (escaped or censored)"))),
        };
        if let Some(first) = lines.insert(index, line_no) {
            return Err(bad(format!(
                "trajectory {index} recorded twice (first on line {first})"
            )));
        }
        outcomes.push(Outcome {
            index,
            steps,
            escaped,
        });
    }
    outcomes.sort_unstable();
    let header = header.ok_or_else(|| RecordError::Format {
        path: path.display().to_string(),
        line: 1,
        message: "no header line with the run's fingerprint".into(),
    })?;
    // a record the run cannot have produced would be counted into a wrong rate
    for o in &outcomes {
        let problem = if o.index >= header.trajectories {
            format!(
                "trajectory index {} is outside this run of {} trajectories (0 to {})",
                o.index,
                header.trajectories,
                header.trajectories.saturating_sub(1)
            )
        } else if o.steps > header.max_steps {
            format!(
                "{} steps is beyond this run's horizon of {} steps",
                o.steps, header.max_steps
            )
        } else {
            continue;
        };
        return Err(RecordError::Format {
            path: path.display().to_string(),
            line: lines[&o.index],
            message: problem,
        });
    }
    Ok(Contents {
        header,
        outcomes,
        lines,
        valid_len: whole,
        warnings,
    })
}

/// Refuses a records path that is a directory (before any other use of it).
///
/// # Errors
/// The path is a directory.
pub fn check_path(path: &Path) -> Result<(), RecordError> {
    if path.is_dir() {
        return Err(io(
            path,
            "is a directory: --records needs a file name (e.g. DIR/records.csv)",
        ));
    }
    Ok(())
}

/// Takes the advisory exclusive lock of a record file opened for writing, so that only one run
/// writes it at a time. File systems without locks (some network mounts) run unlocked.
fn lock(f: &File, path: &Path) -> Result<(), RecordError> {
    match f.try_lock() {
        Ok(()) => Ok(()),
        Err(std::fs::TryLockError::WouldBlock) => Err(io(
            path,
            "is in use by another running escapade (the file is locked): wait for that run to end, or give this run its own --records file",
        )),
        Err(std::fs::TryLockError::Error(e)) if e.kind() == std::io::ErrorKind::Unsupported => {
            Ok(())
        }
        Err(std::fs::TryLockError::Error(e)) => Err(io(path, format!("cannot lock: {e}"))),
    }
}

/// Creates a record file for a new run (an existing file is refused, so no finished work is lost).
///
/// # Errors
/// The file exists or cannot be created.
pub fn create(path: &Path, plan: &Plan) -> Result<Writer, RecordError> {
    check_path(path)?;
    let mut f = OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(path)
        .map_err(|e| {
            if e.kind() == std::io::ErrorKind::AlreadyExists {
                io(
                    path,
                    "exists already: use --resume to continue it, or choose another file",
                )
            } else {
                io(path, e)
            }
        })?;
    lock(&f, path)?;
    f.write_all(Header::of(plan).text().as_bytes())
        .and_then(|()| f.flush())
        .map_err(|e| io(path, e))?;
    Ok(Writer {
        out: BufWriter::new(f),
        dt: plan.params.dt,
        path: path.display().to_string(),
    })
}

/// Opens a record file to continue a run: locks it, checks it belongs to `plan`, drops a torn
/// last line, and returns the writer with the records already there. A missing file starts a new
/// one.
///
/// # Errors
/// A file in use by another run, from another scenario or seed, or malformed.
pub fn resume(path: &Path, plan: &Plan) -> Result<(Writer, Contents), RecordError> {
    check_path(path)?;
    // locked before it is read, so that what is read stays what is continued
    let f = match OpenOptions::new().read(true).append(true).open(path) {
        Ok(f) => f,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => match create(path, plan) {
            Ok(w) => {
                return Ok((
                    w,
                    Contents {
                        header: Header::of(plan),
                        outcomes: Vec::new(),
                        lines: BTreeMap::new(),
                        valid_len: 0,
                        warnings: Vec::new(),
                    },
                ));
            }
            // another run created it in between: its lock decides below
            Err(_) if path.exists() => OpenOptions::new()
                .read(true)
                .append(true)
                .open(path)
                .map_err(|e| io(path, e))?,
            Err(e) => return Err(e),
        },
        Err(e) => return Err(io(path, e)),
    };
    lock(&f, path)?;
    let c = read(path)?;
    let h = Header::of(plan);
    if c.header.fingerprint != h.fingerprint {
        return Err(RecordError::Mismatch {
            path: path.display().to_string(),
            message: format!(
                "records of another run (fingerprint {:016x}, this run {:016x}): same scenario, seed, dt and trajectories are needed to resume",
                c.header.fingerprint, h.fingerprint
            ),
        });
    }
    // appends go to the (new) end after the torn tail is cut off
    f.set_len(c.valid_len as u64).map_err(|e| io(path, e))?;
    Ok((
        Writer {
            out: BufWriter::new(f),
            dt: plan.params.dt,
            path: path.display().to_string(),
        },
        c,
    ))
}

/// Unions record files of one run (same fingerprint), refusing duplicate indices.
///
/// # Errors
/// Unreadable or malformed files, different runs, a trajectory recorded in two files.
pub fn merge(paths: &[&Path]) -> Result<Contents, RecordError> {
    let mut all: Option<Contents> = None;
    let mut owner = BTreeMap::new();
    for &p in paths {
        let c = read(p)?;
        if let Some(a) = &all
            && a.header.fingerprint != c.header.fingerprint
        {
            return Err(RecordError::Mismatch {
                path: p.display().to_string(),
                message: format!(
                    "records of another run (fingerprint {:016x}, first file {:016x})",
                    c.header.fingerprint, a.header.fingerprint
                ),
            });
        }
        for o in &c.outcomes {
            if let Some(prev) = owner.insert(o.index, p.display().to_string()) {
                return Err(RecordError::Format {
                    path: p.display().to_string(),
                    line: c.lines[&o.index],
                    message: format!("trajectory {} is also recorded in {prev}", o.index),
                });
            }
        }
        match &mut all {
            None => all = Some(c),
            Some(a) => {
                a.outcomes.extend(c.outcomes);
                a.lines.extend(c.lines);
                a.warnings.extend(c.warnings);
            }
        }
    }
    let mut a = all.ok_or_else(|| RecordError::Io {
        path: String::new(),
        message: "no record files given".into(),
    })?;
    a.outcomes.sort_unstable();
    Ok(a)
}

/// Writes merged contents as one record file (refusing to overwrite).
///
/// # Errors
/// The file exists or cannot be written.
pub fn write_all(path: &Path, c: &Contents) -> Result<(), RecordError> {
    let mut f = OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(path)
        .map_err(|e| io(path, e))?;
    let mut text = c.header.text();
    for o in &c.outcomes {
        text.push_str(&format!(
            "{},{},{:?},{}\n",
            o.index,
            o.steps,
            o.steps as f64 * c.header.dt,
            if o.escaped { "escaped" } else { "censored" }
        ));
    }
    f.write_all(text.as_bytes()).map_err(|e| io(path, e))
}
