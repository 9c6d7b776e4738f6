//! Any bytes as a profile table: an error or columns fit for a spline, never a panic.
#![no_main]
use escapade::potential::Potential;
use escapade::potential::table::{Table, read_columns};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(cols) = read_columns(data) {
        let t = Table::new(&cols, 1.0);
        let (lo, hi) = t.domain();
        let _ = t.u(0.5 * (lo + hi));
        let _ = t.stationary_points();
    }
});
