//! Any text as a scenario file: an error naming the file, or a validated model; never a panic.
#![no_main]
use escapade::scenario::Model;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    // a `table` key would make the loader read whatever path the fuzzer writes (/dev/zero, say):
    // tables have their own target
    if text.contains("table") {
        return;
    }
    match Model::from_text(text, "fuzz.toml", std::path::Path::new("."), &[]) {
        Ok(_) => {}
        Err(e) => {
            assert!(e.to_string().contains("fuzz.toml") || e.to_string().starts_with("--set"))
        }
    }
});
