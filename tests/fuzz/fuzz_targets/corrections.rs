//! Fuzz target: the tide-correction file reader (per zone, per sounding and per line).
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let _ = ebbwise::io::correctors_file::parse_correction_file(data, std::path::Path::new("c.csv"));
});
