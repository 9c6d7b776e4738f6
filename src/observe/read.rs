//! Streaming readers of trajectory files: one pass over each file, handing the positions to a
//! [`Sink`] in chunks of a reused buffer (no allocation per sample).
//!
//! Plain text: one sample per line, fields separated by commas and/or whitespace, `#` comments
//! and blank lines skipped, an optional header line (no field a number) naming the columns.
//! Without explicit columns: a header's `x`/`position`/`q` column is the position and its
//! `t`/`time` column the time; without a header one column is the position and two columns are
//! (time, position). Only the columns used are parsed; each must be a finite number. A pass may
//! hand a velocity column to its sink instead of the position ([`Pick`]); it is never guessed,
//! and must differ from the position and time columns.
//!
//! NumPy `.npy` (format versions 1–3): little- or big-endian float64/float32, 1-D (positions) or
//! 2-D (rows are samples, columns as for text; C or Fortran order). The header is a short Python
//! dict literal, read here directly (a crate would add a dependency for forty lines).
//!
//! Time: a time column must increase strictly and evenly: each interval may differ from the
//! first by at most [`TIME_TOL`] of it (looser than the rounding of times printed with 7 or more
//! significant digits, tight enough to catch a dropped or repeated frame). The sampling interval
//! used is the mean, (t_last − t_first)/(n − 1). Without a time column the given interval is used.

use super::{ObserveError, Sink};
use serde::Serialize;
use std::fs::File;
use std::io::{BufRead, BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

/// Samples per chunk handed to the accumulators.
pub const CHUNK: usize = 4096;
/// The chunk buffer never reserves more than this many samples up front.
const CHUNK_CAP: usize = 1 << 16;
/// Allowed relative deviation of a time interval from the first one.
pub const TIME_TOL: f64 = 0.01;
/// A trajectory needs at least this many samples (one interval).
pub const MIN_FILE_SAMPLES: u64 = 2;

/// A column, by 0-based index or by its header name.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ColumnRef {
    /// 0-based index
    Index(usize),
    /// header name (case-insensitive)
    Name(String),
}

/// Which columns hold the position and the time (None: the defaults of the module comment).
#[derive(Debug, Clone, Default)]
pub struct Columns {
    /// the position column
    pub position: Option<ColumnRef>,
    /// the time column
    pub time: Option<ColumnRef>,
}

/// Which column a pass hands to its sink.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Pick {
    /// the position
    Position,
    /// a velocity column (never guessed; it must differ from the position and time columns)
    Velocity(ColumnRef),
}

/// A sink keeping every sample of the current trajectory (8 bytes per sample), one vector per
/// trajectory with its sampling interval.
#[derive(Debug, Default)]
pub struct Collect {
    /// the finished trajectories with their sampling intervals
    pub series: Vec<(Vec<f64>, f64)>,
    current: Vec<f64>,
}

impl Sink for Collect {
    fn feed(&mut self, xs: &[f64]) {
        self.current.extend_from_slice(xs);
    }
    fn end(&mut self, dt: f64) {
        self.series.push((std::mem::take(&mut self.current), dt));
    }
}

/// One trajectory.
#[derive(Debug, Clone)]
pub enum Source {
    /// a text or `.npy` file (by its extension)
    File(PathBuf),
    /// samples in memory, evenly spaced by `dt`
    Samples {
        /// a name for messages
        name: String,
        /// the positions
        values: Vec<f64>,
        /// the sampling interval
        dt: f64,
    },
}

/// What was read of one trajectory.
#[derive(Debug, Clone, Serialize)]
pub struct FileInfo {
    /// file name (or the in-memory name)
    pub name: String,
    /// samples
    pub samples: u64,
    /// sampling interval
    pub dt: f64,
    /// duration, (samples − 1) dt
    pub duration: f64,
}

fn at(file: &str, place: String, message: impl Into<String>) -> ObserveError {
    ObserveError::At {
        file: file.to_string(),
        place,
        message: message.into(),
    }
}

fn io_err(file: &str, e: &std::io::Error) -> ObserveError {
    ObserveError::Io {
        file: file.to_string(),
        message: e.to_string(),
    }
}

/// The sampling clock of one file: checks a time column, or counts samples at a fixed interval.
struct Clock {
    dt: Option<f64>,
    first: f64,
    prev: f64,
    step: f64,
    n: u64,
}

impl Clock {
    fn new(dt: Option<f64>) -> Self {
        Self {
            dt,
            first: 0.0,
            prev: 0.0,
            step: 0.0,
            n: 0,
        }
    }

    /// Records one sample at time `t` (None: no time column).
    fn tick(&mut self, t: Option<f64>) -> Result<(), String> {
        if let Some(t) = t {
            match self.n {
                0 => self.first = t,
                1 => {
                    self.step = t - self.prev;
                    if self.step <= 0.0 {
                        return Err(format!(
                            "time {t} does not increase (previous {})",
                            self.prev
                        ));
                    }
                }
                _ => {
                    let d = t - self.prev;
                    if d <= 0.0 {
                        return Err(format!(
                            "time {t} does not increase (previous {})",
                            self.prev
                        ));
                    }
                    if (d - self.step).abs() > TIME_TOL * self.step {
                        return Err(format!(
                            "uneven time step {d} (the first was {}; allowed deviation {}%): a dropped or repeated frame?",
                            self.step,
                            100.0 * TIME_TOL
                        ));
                    }
                }
            }
            self.prev = t;
        }
        self.n += 1;
        Ok(())
    }

    /// The sampling interval: the mean of a time column, or the given one.
    fn dt(&self) -> f64 {
        self.dt
            .unwrap_or((self.prev - self.first) / (self.n.saturating_sub(1)) as f64)
    }
}

/// Streams one source into `sink`; `dt` is the fixed sampling interval (used when no time column
/// is read).
///
/// # Errors
/// See [`ObserveError`].
pub fn stream<S: Sink + ?Sized>(
    source: &Source,
    columns: &Columns,
    dt: Option<f64>,
    chunk: usize,
    sink: &mut S,
) -> Result<FileInfo, ObserveError> {
    stream_column(source, columns, dt, chunk, Pick::Position, sink)
}

/// As [`stream`], handing the column `pick` to the sink (the time column and every check as
/// for the position).
///
/// # Errors
/// As [`stream`]; also a velocity column that does not exist or is the position or time column,
/// or a velocity asked of samples in memory.
pub fn stream_column<S: Sink + ?Sized>(
    source: &Source,
    columns: &Columns,
    dt: Option<f64>,
    chunk: usize,
    pick: Pick,
    sink: &mut S,
) -> Result<FileInfo, ObserveError> {
    let mut buf = Vec::with_capacity(chunk.min(CHUNK_CAP));
    let (name, clock) = match source {
        Source::Samples { name, .. } if pick != Pick::Position => {
            return Err(ObserveError::File {
                file: name.clone(),
                message: "samples in memory have no velocity column".into(),
            });
        }
        Source::Samples { name, values, dt } => {
            if !(dt.is_finite() && *dt > 0.0) {
                return Err(ObserveError::File {
                    file: name.clone(),
                    message: format!("the sampling interval must be positive, not {dt}"),
                });
            }
            let mut clock = Clock::new(Some(*dt));
            for (i, &x) in values.iter().enumerate() {
                if !x.is_finite() {
                    return Err(at(name, format!("sample {}", i + 1), "not a finite number"));
                }
                clock.n += 1;
                push(&mut buf, x, chunk, sink);
            }
            (name.clone(), clock)
        }
        Source::File(path) => {
            let name = path.display().to_string();
            let is_npy = path
                .extension()
                .is_some_and(|e| e.eq_ignore_ascii_case("npy"));
            let clock = if is_npy {
                read_npy(path, &name, (columns, &pick), dt, chunk, &mut buf, sink)?
            } else {
                read_text(path, &name, (columns, &pick), dt, chunk, &mut buf, sink)?
            };
            (name, clock)
        }
    };
    if !buf.is_empty() {
        sink.feed(&buf);
    }
    if clock.n < MIN_FILE_SAMPLES {
        return Err(ObserveError::File {
            file: name,
            message: format!(
                "{} sample(s); a trajectory needs at least {MIN_FILE_SAMPLES}",
                clock.n
            ),
        });
    }
    let dt = clock.dt();
    sink.end(dt);
    Ok(FileInfo {
        name,
        samples: clock.n,
        dt,
        duration: (clock.n - 1) as f64 * dt,
    })
}

#[inline]
fn push<S: Sink + ?Sized>(buf: &mut Vec<f64>, x: f64, chunk: usize, sink: &mut S) {
    buf.push(x);
    if buf.len() >= chunk {
        sink.feed(buf);
        buf.clear();
    }
}

/// The fields of a text line: separated by commas and/or whitespace.
fn fields(line: &str) -> impl Iterator<Item = &str> {
    line.split(|c: char| c == ',' || c.is_ascii_whitespace())
        .filter(|f| !f.is_empty())
}

/// Position and time column indices of a file with `n` columns and optional header `names`.
fn layout(
    names: Option<&[String]>,
    n: usize,
    columns: &Columns,
    dt: Option<f64>,
) -> Result<(usize, Option<usize>), String> {
    let find = |c: &ColumnRef, what: &str| find_column(names, n, c, what);
    let named = |options: &[&str]| {
        names.and_then(|h| {
            h.iter()
                .position(|x| options.iter().any(|o| x.eq_ignore_ascii_case(o)))
        })
    };
    if columns.time.is_some() && dt.is_some() {
        return Err("give a time column or a sampling interval, not both".into());
    }
    let time = match &columns.time {
        Some(c) => Some(find(c, "time")?),
        None if dt.is_some() => None,
        None => match names {
            Some(_) => named(&["t", "time"]),
            None if n == 2 => Some(0),
            None => None,
        },
    };
    let position = match &columns.position {
        Some(c) => find(c, "position")?,
        None => match (named(&["x", "position", "q"]), n, time) {
            (Some(i), _, _) => i,
            (None, 1, _) => 0,
            (None, 2, Some(t)) => 1 - t,
            (None, 2, None) if names.is_none() => 1,
            _ => {
                return Err(format!(
                    "{n} columns: say which one is the position (and which the time)"
                ));
            }
        },
    };
    if time.is_none() && dt.is_none() {
        return Err("no time column: give the sampling interval".into());
    }
    if Some(position) == time {
        return Err("the position and time columns are the same".into());
    }
    Ok((position, time))
}

/// The index of column `c` in a file with `n` columns and optional header `names`.
fn find_column(
    names: Option<&[String]>,
    n: usize,
    c: &ColumnRef,
    what: &str,
) -> Result<usize, String> {
    match c {
        ColumnRef::Index(i) if *i < n => Ok(*i),
        ColumnRef::Index(i) => Err(format!(
            "the {what} column {} does not exist ({n} columns)",
            i + 1
        )),
        ColumnRef::Name(s) => match names {
            None => Err(format!(
                "no header line names the {what} column \"{s}\": give its number"
            )),
            Some(h) => h
                .iter()
                .position(|x| x.eq_ignore_ascii_case(s))
                .ok_or_else(|| format!("no column \"{s}\" in the header")),
        },
    }
}

/// The column a pass reads (`pick`), after [`layout`] placed the position `p` and the time `t`:
/// a velocity column must exist and differ from both.
fn picked(
    names: Option<&[String]>,
    n: usize,
    (p, t): (usize, Option<usize>),
    pick: &Pick,
) -> Result<usize, String> {
    match pick {
        Pick::Position => Ok(p),
        Pick::Velocity(c) => {
            let v = find_column(names, n, c, "velocity")?;
            if v == p || Some(v) == t {
                return Err(format!(
                    "the velocity column {} is also the position or the time column",
                    v + 1
                ));
            }
            Ok(v)
        }
    }
}

/// Parses field `k` (0-based) of a line.
#[inline]
fn number(f: &str, k: usize) -> Result<f64, String> {
    match f.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(format!("field {} \"{f}\" is not a finite number", k + 1)),
        Err(_) => Err(format!("field {} \"{f}\" is not a number", k + 1)),
    }
}

fn read_text<S: Sink + ?Sized>(
    path: &Path,
    name: &str,
    (columns, pick): (&Columns, &Pick),
    dt: Option<f64>,
    chunk: usize,
    buf: &mut Vec<f64>,
    sink: &mut S,
) -> Result<Clock, ObserveError> {
    let file = File::open(path).map_err(|e| io_err(name, &e))?;
    let mut r = BufReader::with_capacity(1 << 16, file);
    let mut line = String::new();
    let mut line_no = 0u64;
    let mut lay: Option<(usize, Option<usize>, usize)> = None;
    let mut clock = Clock::new(dt);
    let place = |l: u64| format!("line {l}");
    loop {
        line.clear();
        match r.read_line(&mut line) {
            Ok(0) => break,
            Ok(_) => {}
            Err(e) if e.kind() == std::io::ErrorKind::InvalidData => {
                return Err(at(name, place(line_no + 1), "not UTF-8 text"));
            }
            Err(e) => return Err(io_err(name, &e)),
        }
        line_no += 1;
        let s = line.trim();
        if s.is_empty() || s.starts_with('#') {
            continue;
        }
        let (p, t, n) = match lay {
            Some(l) => l,
            None => {
                let all: Vec<&str> = fields(s).collect();
                let header = all.iter().all(|f| f.parse::<f64>().is_err());
                let names: Vec<String> = all.iter().map(|f| f.to_string()).collect();
                let head = header.then_some(&names[..]);
                let (p, t) = layout(head, all.len(), columns, clock.dt)
                    .and_then(|pt| Ok((picked(head, all.len(), pt, pick)?, pt.1)))
                    .map_err(|m| at(name, place(line_no), m))?;
                lay = Some((p, t, all.len()));
                if header {
                    continue;
                }
                (p, t, all.len())
            }
        };
        let (mut x, mut time, mut count) = (0.0, None, 0);
        for (k, f) in fields(s).enumerate() {
            count += 1;
            if k == p {
                x = number(f, k).map_err(|m| at(name, place(line_no), m))?;
            } else if Some(k) == t {
                time = Some(number(f, k).map_err(|m| at(name, place(line_no), m))?);
            }
        }
        if count != n {
            return Err(at(
                name,
                place(line_no),
                format!("{count} fields, expected {n} as on the first line"),
            ));
        }
        clock.tick(time).map_err(|m| at(name, place(line_no), m))?;
        push(buf, x, chunk, sink);
    }
    if lay.is_none() {
        return Err(ObserveError::File {
            file: name.to_string(),
            message: "no samples (empty, or only comments)".into(),
        });
    }
    Ok(clock)
}

/// The parts of a `.npy` header the reader needs.
#[derive(Debug, PartialEq)]
struct NpyHeader {
    /// bytes per item (4 or 8)
    size: usize,
    big_endian: bool,
    fortran: bool,
    rows: u64,
    cols: usize,
    /// offset of the data
    data: u64,
}

/// The value of `key` in a Python dict literal (up to the next top-level comma or brace).
fn dict_value<'a>(dict: &'a str, key: &str) -> Option<&'a str> {
    let i = dict
        .find(&format!("'{key}'"))
        .or_else(|| dict.find(&format!("\"{key}\"")))?;
    let rest = dict[i + key.len() + 2..].trim_start().strip_prefix(':')?;
    let rest = rest.trim_start();
    let end = if rest.starts_with('(') {
        rest.find(')')? + 1
    } else {
        rest.find([',', '}']).unwrap_or(rest.len())
    };
    Some(rest[..end].trim())
}

fn npy_header(bytes: &[u8], total: u64) -> Result<NpyHeader, String> {
    if bytes.len() < 10 || &bytes[..6] != b"\x93NUMPY" {
        return Err("not a .npy file (no \\x93NUMPY magic)".into());
    }
    let (len, start) = match bytes[6] {
        1 => (usize::from(u16::from_le_bytes([bytes[8], bytes[9]])), 10),
        2 | 3 if bytes.len() >= 12 => (
            u32::from_le_bytes([bytes[8], bytes[9], bytes[10], bytes[11]]) as usize,
            12,
        ),
        v => return Err(format!(".npy format version {v} is not supported")),
    };
    let dict = bytes
        .get(start..start + len)
        .and_then(|d| std::str::from_utf8(d).ok())
        .ok_or("the .npy header is cut off or not text")?;
    let descr = dict_value(dict, "descr")
        .ok_or("the .npy header has no 'descr'")?
        .trim_matches(['\'', '"']);
    let (big_endian, size) = match descr {
        "<f8" | "=f8" => (false, 8),
        "<f4" | "=f4" => (false, 4),
        ">f8" => (true, 8),
        ">f4" => (true, 4),
        d => {
            return Err(format!(
                "data type '{d}' is not supported (float64 or float32 only)"
            ));
        }
    };
    let fortran = match dict_value(dict, "fortran_order") {
        Some("True") => true,
        Some("False") => false,
        _ => return Err("the .npy header has no fortran_order True/False".into()),
    };
    let shape = dict_value(dict, "shape").ok_or("the .npy header has no 'shape'")?;
    let dims: Vec<u64> = shape
        .trim_matches(['(', ')'])
        .split(',')
        .map(str::trim)
        .filter(|s| !s.is_empty())
        .map(|s| s.parse::<u64>().map_err(|_| format!("bad shape {shape}")))
        .collect::<Result<_, _>>()?;
    let (rows, cols) = match dims[..] {
        [n] => (n, 1),
        [n, m] if m > 0 => (n, m as usize),
        _ => {
            return Err(format!(
                "shape {shape}: a trajectory is 1-D (positions) or 2-D (samples × columns)"
            ));
        }
    };
    let data = (start + len) as u64;
    if data + rows * cols as u64 * size as u64 > total {
        return Err(format!("the file is shorter than its shape {shape} says"));
    }
    Ok(NpyHeader {
        size,
        big_endian,
        fortran,
        rows,
        cols,
        data,
    })
}

/// Sequential reader of one column of a `.npy` array.
struct NpyColumn {
    r: BufReader<File>,
    /// bytes to skip after each item (the other columns of a C-order row)
    skip: i64,
    size: usize,
    big: bool,
}

impl NpyColumn {
    fn open(path: &Path, h: &NpyHeader, col: usize) -> std::io::Result<Self> {
        let mut f = File::open(path)?;
        let sz = h.size as u64;
        let (off, skip) = if h.fortran {
            (h.data + col as u64 * h.rows * sz, 0)
        } else {
            (h.data + col as u64 * sz, ((h.cols - 1) * h.size) as i64)
        };
        f.seek(SeekFrom::Start(off))?;
        Ok(Self {
            r: BufReader::with_capacity(1 << 16, f),
            skip,
            size: h.size,
            big: h.big_endian,
        })
    }

    fn next(&mut self, first: bool) -> std::io::Result<f64> {
        if !first && self.skip > 0 {
            self.r.seek_relative(self.skip)?;
        }
        let mut b = [0u8; 8];
        self.r.read_exact(&mut b[..self.size])?;
        Ok(match (self.size, self.big) {
            (8, false) => f64::from_le_bytes(b),
            (8, true) => f64::from_be_bytes(b),
            (_, false) => f64::from(f32::from_le_bytes([b[0], b[1], b[2], b[3]])),
            (_, true) => f64::from(f32::from_be_bytes([b[0], b[1], b[2], b[3]])),
        })
    }
}

fn read_npy<S: Sink + ?Sized>(
    path: &Path,
    name: &str,
    (columns, pick): (&Columns, &Pick),
    dt: Option<f64>,
    chunk: usize,
    buf: &mut Vec<f64>,
    sink: &mut S,
) -> Result<Clock, ObserveError> {
    let file_err = |m: String| ObserveError::File {
        file: name.to_string(),
        message: m,
    };
    let mut f = File::open(path).map_err(|e| io_err(name, &e))?;
    let total = f.metadata().map_err(|e| io_err(name, &e))?.len();
    let mut head = vec![0u8; total.min(1 << 16) as usize];
    f.read_exact(&mut head).map_err(|e| io_err(name, &e))?;
    let h = npy_header(&head, total).map_err(file_err)?;
    let (p, t) = layout(None, h.cols, columns, dt)
        .and_then(|pt| Ok((picked(None, h.cols, pt, pick)?, pt.1)))
        .map_err(file_err)?;
    let mut pos = NpyColumn::open(path, &h, p).map_err(|e| io_err(name, &e))?;
    let mut time = match t {
        Some(t) => Some(NpyColumn::open(path, &h, t).map_err(|e| io_err(name, &e))?),
        None => None,
    };
    let mut clock = Clock::new(dt);
    for i in 0..h.rows {
        let place = || format!("row {}", i + 1);
        let x = pos.next(i == 0).map_err(|e| io_err(name, &e))?;
        let tv = match time.as_mut() {
            Some(c) => Some(c.next(i == 0).map_err(|e| io_err(name, &e))?),
            None => None,
        };
        if !x.is_finite() || tv.is_some_and(|v| !v.is_finite()) {
            return Err(at(name, place(), "not a finite number (NaN or infinite)"));
        }
        clock.tick(tv).map_err(|m| at(name, place(), m))?;
        push(buf, x, chunk, sink);
    }
    Ok(clock)
}

#[cfg(test)]
mod tests {
    use super::*;

    // The header numpy 1.x writes for np.save of a float64 array of shape (5, 2) (NEP 1 format;
    // the dict literal as numpy prints it).
    #[test]
    fn npy_header_fields() {
        let dict = "{'descr': '<f8', 'fortran_order': False, 'shape': (5, 2), }";
        let mut b = b"\x93NUMPY\x01\x00".to_vec();
        b.extend_from_slice(&(dict.len() as u16).to_le_bytes());
        b.extend_from_slice(dict.as_bytes());
        let h = npy_header(&b, b.len() as u64 + 80).unwrap();
        assert_eq!(
            h,
            NpyHeader {
                size: 8,
                big_endian: false,
                fortran: false,
                rows: 5,
                cols: 2,
                data: b.len() as u64
            }
        );
        assert!(npy_header(&b, b.len() as u64 + 79).is_err());
    }

    #[test]
    fn default_layouts() {
        let c = Columns::default();
        assert_eq!(layout(None, 1, &c, Some(0.1)), Ok((0, None)));
        assert_eq!(layout(None, 2, &c, None), Ok((1, Some(0))));
        assert!(layout(None, 1, &c, None).is_err());
        assert!(layout(None, 3, &c, None).is_err());
        let h = ["time".to_string(), "other".into(), "x".into()];
        assert_eq!(layout(Some(&h), 3, &c, None), Ok((2, Some(0))));
    }
}
