//! The free energy from an equilibrium trajectory, U(x) = −ln p(x) in kT (Boltzmann inversion of
//! the histogram), with σ_U from a non-overlapping block bootstrap (Carlstein, Ann. Stat. 14,
//! 1171 (1986); Künsch, Ann. Stat. 17, 1217 (1989) for the moving-block variant).
//!
//! Bins: a given width, or Scott's rule h = 3.49 s N^{−1/3} (Scott, Biometrika 66, 605 (1979);
//! s the standard deviation, N all samples) clamped to [`MIN_BINS`]..[`MAX_BINS`] bins over the
//! observed range. Freedman–Diaconis needs quantiles, which a single streamed pass cannot give.
//! p_i = n_i / (N h); empty bins are dropped with a note.
//!
//! Blocks: consecutive samples of one trajectory, [`BLOCK_TAU`] τ_int long (τ_int of the position,
//! [`super::correlation`]) and long enough that there are at most [`MAX_BLOCKS`] of them (memory:
//! blocks × bins counts). For exponential correlations the block-mean variance is short by a
//! fraction ≈ τ_int/L (Flyvbjerg & Petersen, J. Chem. Phys. 91, 461 (1989)), 10% at L = 10 τ_int,
//! 5% on σ. A resample draws as many blocks as there are, with replacement, and recomputes
//! U_i = −ln(n_i*/(N* h)); σ_U is the standard deviation over [`super::DEFAULT_RESAMPLES`]
//! resamples. The position's τ_int is used for every bin: in a landscape with barriers it is set by
//! the slowest (hopping) mode, which also governs the bins' occupations, so it errs on the safe
//! side.

use super::correlation::{Autocorrelation, Moments};
use super::{ObserveError, Sink};
use crate::seed;
use rand::RngExt;
use rayon::prelude::*;
use serde::Serialize;
use std::io::Write;

/// Block length in units of τ_int.
pub const BLOCK_TAU: f64 = 10.0;
/// At most this many blocks are kept (longer blocks beyond it).
pub const MAX_BLOCKS: u64 = 1000;
/// Fewer blocks than this make σ_U rough (the bootstrap distribution has few distinct values).
pub const MIN_BLOCKS: usize = 20;
/// Fewest bins of the automatic rule.
pub const MIN_BINS: usize = 20;
/// Most bins of the automatic rule.
pub const MAX_BINS: usize = 500;
/// Most bins with a given width.
pub const MAX_USER_BINS: usize = 5000;

/// The histogram grid.
#[derive(Debug, Clone, Copy)]
pub struct Binning {
    /// left edge of bin 0
    pub lo: f64,
    /// bin width
    pub width: f64,
    /// number of bins
    pub bins: usize,
    /// whether the width was given
    pub given: bool,
}

/// The grid for positions summarised by `m` (see the module comment).
///
/// # Errors
/// A non-positive width, too many bins, or all positions equal.
pub fn binning(m: &Moments, width: Option<f64>) -> Result<Binning, ObserveError> {
    let (min, max) = m.range();
    let opt = |message: String| ObserveError::Option {
        option: "bin_width",
        message,
    };
    if max <= min {
        return Err(opt(format!(
            "every position equals {min}: no histogram can be made"
        )));
    }
    match width {
        Some(h) => {
            if !(h.is_finite() && h > 0.0) {
                return Err(opt(format!("the bin width must be positive, not {h}")));
            }
            let lo = (min / h).floor() * h;
            let bins = ((max - lo) / h).floor() as usize + 1;
            if bins > MAX_USER_BINS {
                return Err(opt(format!(
                    "{bins} bins of width {h} over [{min}, {max}]: at most {MAX_USER_BINS}"
                )));
            }
            Ok(Binning {
                lo,
                width: h,
                bins,
                given: true,
            })
        }
        None => {
            let h = 3.49 * m.sd() * (m.count() as f64).powf(-1.0 / 3.0);
            let bins = ((max - min) / h)
                .ceil()
                .clamp(MIN_BINS as f64, MAX_BINS as f64) as usize;
            Ok(Binning {
                lo: min,
                width: (max - min) / bins as f64,
                bins,
                given: false,
            })
        }
    }
}

/// Samples per block for `samples` samples and τ_int `tau` (samples).
pub fn block_length(samples: u64, tau: f64) -> u64 {
    ((BLOCK_TAU * tau).ceil() as u64)
        .max(samples.div_ceil(MAX_BLOCKS))
        .max(1)
}

/// The histogram, kept per block. Blocks end at the end of each trajectory (a last, shorter block
/// is kept as it is).
#[derive(Debug, Clone)]
pub struct BlockHistogram {
    bin: Binning,
    inv_h: f64,
    block: u64,
    cur: Vec<u64>,
    cur_n: u64,
    /// the blocks' counts, one row of `bins` per block
    rows: Vec<u64>,
    total: Vec<u64>,
}

impl BlockHistogram {
    /// An empty histogram on `bin` with blocks of `block` samples.
    pub fn new(bin: Binning, block: u64) -> Self {
        Self {
            bin,
            inv_h: 1.0 / bin.width,
            block,
            cur: vec![0; bin.bins],
            cur_n: 0,
            rows: Vec::new(),
            total: vec![0; bin.bins],
        }
    }

    fn flush(&mut self) {
        if self.cur_n == 0 {
            return;
        }
        self.rows.extend_from_slice(&self.cur);
        for (t, c) in self.total.iter_mut().zip(&mut self.cur) {
            *t += *c;
            *c = 0;
        }
        self.cur_n = 0;
    }

    /// Counts per bin over everything fed.
    pub fn counts(&self) -> &[u64] {
        &self.total
    }

    /// Number of finished blocks.
    pub fn blocks(&self) -> usize {
        self.rows.len() / self.bin.bins
    }
}

impl Sink for BlockHistogram {
    fn feed(&mut self, xs: &[f64]) {
        let last = self.bin.bins - 1;
        for &x in xs {
            // positions below lo cannot occur (lo is the minimum of the same data)
            let i = (((x - self.bin.lo) * self.inv_h) as usize).min(last);
            self.cur[i] += 1;
            self.cur_n += 1;
            if self.cur_n == self.block {
                self.flush();
            }
        }
    }
    fn end(&mut self, _dt: f64) {
        self.flush();
    }
}

/// One bin of the profile.
#[derive(Debug, Clone, Serialize)]
pub struct Bin {
    /// bin centre
    pub x: f64,
    /// samples in the bin
    pub count: u64,
    /// −ln p(x) (kT), p the normalised density
    pub u: f64,
    /// bootstrap standard deviation of U (kT); null when fewer than two resamples had samples here
    pub sigma_u: Option<f64>,
}

/// U(x) with σ_U and how it was made.
#[derive(Debug, Clone, Serialize)]
pub struct FreeEnergy {
    /// the non-empty bins
    pub bins: Vec<Bin>,
    /// bin width
    pub bin_width: f64,
    /// how the bins were chosen
    pub bin_rule: String,
    /// empty bins left out
    pub empty_bins_dropped: usize,
    /// samples per bootstrap block
    pub block_samples: u64,
    /// blocks
    pub blocks: usize,
    /// bootstrap resamples
    pub resamples: usize,
    /// the σ_U method, in words
    pub sigma_rule: String,
    /// what the user should know about this profile
    pub notes: Vec<String>,
}

/// U_i = −ln(n_i/(N h)), or NaN for an empty bin.
fn inverted(counts: &[u64], h: f64) -> Vec<f64> {
    let n: u64 = counts.iter().sum();
    let norm = n as f64 * h;
    counts
        .iter()
        .map(|&c| {
            if c == 0 {
                f64::NAN
            } else {
                -(c as f64 / norm).ln()
            }
        })
        .collect()
}

/// U and its block-bootstrap σ_U from the filled histogram.
pub fn free_energy(
    hist: &BlockHistogram,
    corr: &Autocorrelation,
    resamples: usize,
    seed: u64,
) -> FreeEnergy {
    let nb = hist.bin.bins;
    let h = hist.bin.width;
    let u = inverted(&hist.total, h);
    let blocks = hist.blocks();
    let mut notes = Vec::new();
    // per-bin Σ u*, Σ u*², valid resamples; each resample from its own stream, summed in order
    let master = seed::derive(seed, seed::OBSERVED_BOOTSTRAP);
    let draws: Vec<Vec<f64>> = if blocks >= 2 {
        (0..resamples as u64)
            .into_par_iter()
            .map(|r| {
                let mut rng = seed::stream(master, r);
                let mut c = vec![0u64; nb];
                for _ in 0..blocks {
                    let b = rng.random_range(0..blocks);
                    for (ci, &bi) in c.iter_mut().zip(&hist.rows[b * nb..(b + 1) * nb]) {
                        *ci += bi;
                    }
                }
                inverted(&c, h)
            })
            .collect()
    } else {
        Vec::new()
    };
    let mut bins = Vec::new();
    let mut sparse = 0;
    for i in 0..nb {
        if hist.total[i] == 0 {
            continue;
        }
        let valid: Vec<f64> = draws.iter().map(|d| d[i]).filter(|v| !v.is_nan()).collect();
        if valid.len() < draws.len() {
            sparse += 1;
        }
        let sigma_u = (valid.len() >= 2).then(|| {
            let m = valid.iter().sum::<f64>() / valid.len() as f64;
            let v = valid.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (valid.len() - 1) as f64;
            v.sqrt()
        });
        bins.push(Bin {
            x: hist.bin.lo + (i as f64 + 0.5) * h,
            count: hist.total[i],
            u: u[i],
            sigma_u,
        });
    }
    let dropped = nb - bins.len();
    if dropped > 0 {
        notes.push(format!(
            "{dropped} empty bin(s) left out of the profile (no samples: U is unknown there)"
        ));
    }
    if sparse > 0 {
        notes.push(format!(
            "{sparse} bin(s) were empty in some bootstrap resamples; their σ_U uses the others and is rough"
        ));
    }
    if blocks < MIN_BLOCKS {
        notes.push(format!(
            "only {blocks} bootstrap block(s) of {} samples (10 τ_int): σ_U is rough{}",
            hist.block,
            if blocks < 2 {
                "; none could be computed"
            } else {
                ""
            }
        ));
    }
    let bin_rule = if hist.bin.given {
        format!("given width {h}")
    } else {
        format!(
            "Scott's rule 3.49 s N^(-1/3) over the observed range, clamped to {MIN_BINS}..{MAX_BINS} bins: {nb} bins"
        )
    };
    FreeEnergy {
        bins,
        bin_width: h,
        bin_rule,
        empty_bins_dropped: dropped,
        block_samples: hist.block,
        blocks,
        resamples: draws.len(),
        sigma_rule: format!(
            "non-overlapping block bootstrap: blocks of {} samples (≥ {BLOCK_TAU} τ_int, τ_int = {:.4} samples), {} resamples",
            hist.block,
            corr.tau_int,
            draws.len()
        ),
        notes,
    }
}

/// Writes the profile as a table the scenario reader takes (`[potential] table = ...`): a
/// comment, the header `x,U,sigma_U`, and one row per bin with σ_U, U shifted to a minimum of 0
/// and both multiplied by `energy_per_kt` (1 for kT). Returns the rows written.
///
/// # Errors
/// The writer's.
pub fn write_profile<W: Write>(
    fe: &FreeEnergy,
    energy_per_kt: f64,
    mut out: W,
) -> std::io::Result<usize> {
    let rows: Vec<(f64, f64, f64)> = fe
        .bins
        .iter()
        .filter_map(|b| b.sigma_u.map(|s| (b.x, b.u, s)))
        .collect();
    let min = rows.iter().map(|r| r.1).fold(f64::INFINITY, f64::min);
    writeln!(
        out,
        "# free energy from observed trajectories: U = -ln p(x), shifted to a minimum of 0; sigma_U by {}",
        fe.sigma_rule
    )?;
    writeln!(out, "x,U,sigma_U")?;
    for (x, u, s) in &rows {
        writeln!(
            out,
            "{x},{},{}",
            (u - min) * energy_per_kt,
            s * energy_per_kt
        )?;
    }
    Ok(rows.len())
}
