//! Seeding: every random number in the crate comes from a stream derived from a master seed and
//! an index, so results depend on the seed only, never on threads, shards or resumption. The
//! per-method salts keep the streams of different uses of one master seed apart.
//!
//! splitmix64 is the finaliser of Steele, Lea & Flood, "Fast splittable pseudorandom number
//! generators", OOPSLA 2014; each stream is a PCG-64 (O'Neill 2014) keyed by two splitmix64
//! outputs, with the index as its increment.

use rand_pcg::Pcg64;

/// Salt of the reactive-flux runs.
pub const REACTIVE_FLUX: u64 = 0x00f1_0c5e_ed00_0001;
/// Salt of the well-to-well long trajectories.
pub const TRANSITIONS: u64 = 0x7e11_0000_0000_0002;
/// Salt of the periodic long trajectories.
pub const PERIODIC: u64 = 0x9e71_0d1c_0000_0003;
/// Salt of forward flux sampling stages (mixed with the replica and stage).
pub const FFS: u64 = 0xFF5_0000;
/// Salt of the block bootstrap of observed trajectories (free-energy σ_U).
pub const OBSERVED_BOOTSTRAP: u64 = 0xb007_5742_0000_0005;
/// Salt of the Monte Carlo chain over the propagator posterior (observed D(x)).
pub const POSTERIOR_DIFFUSION: u64 = 0xd1ff_0000_0000_0014;
/// Salt of the σ_D draws of the uncertainty propagation (independent of the σ_U draws).
pub const DIFFUSION_DRAWS: u64 = 0xd1ff_d12a_0000_0006;
/// Salt of the block bootstrap of observed velocities (friction and memory kernel).
pub const VELOCITY_BOOTSTRAP: u64 = 0x0e10_c17e_0000_0015;
/// Seed of the smoothing fit's fixed probe vectors (the fit must not depend on any user seed).
pub const PROBES: u64 = 0x05ee_df17;
/// Multiplier spreading scan point indices before mixing them into the master seed.
pub const SCAN_POINT: u64 = 0x9e37_79b9;

/// splitmix64 finaliser (Steele, Lea & Flood 2014).
#[inline]
pub fn splitmix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// The random stream of trajectory (or draw, or trial) `index` under `seed`.
pub fn stream(seed: u64, index: u64) -> Pcg64 {
    let a = splitmix64(seed ^ splitmix64(index));
    let b = splitmix64(a ^ 0x5851_f42d_4c95_7f2d);
    Pcg64::new((u128::from(a) << 64) | u128::from(b), u128::from(index))
}

/// The master seed of a derived run (a method's own runs, a scan point): `seed` mixed with `salt`.
#[inline]
pub fn derive(seed: u64, salt: u64) -> u64 {
    splitmix64(seed ^ salt)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Two uses sharing a salt would draw the same numbers from one master seed.
    #[test]
    fn salts_are_distinct() {
        let mut s = [
            REACTIVE_FLUX,
            TRANSITIONS,
            PERIODIC,
            FFS,
            OBSERVED_BOOTSTRAP,
            POSTERIOR_DIFFUSION,
            DIFFUSION_DRAWS,
            VELOCITY_BOOTSTRAP,
            PROBES,
        ];
        s.sort_unstable();
        assert!(s.windows(2).all(|w| w[0] != w[1]), "{s:x?}");
    }
}
