//! Any text as a formula: an error with a position inside the text, or a formula whose value and
//! derivatives evaluate without panicking.
#![no_main]
use escapade::potential::Formula;
use libfuzzer_sys::fuzz_target;
use std::collections::BTreeMap;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let mut c = BTreeMap::new();
    c.insert("k".to_string(), 2.0);
    match Formula::parse(text, &c) {
        Ok(f) => {
            for x in [-1.5, 0.0, 0.3, 2.0] {
                let _ = (f.value(x), f.d1(x), f.d2(x));
            }
        }
        Err(e) => assert!(e.position >= 1 && e.position <= text.chars().count() + 1),
    }
});
