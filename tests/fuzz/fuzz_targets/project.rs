//! Fuzz target: the project-file reader must return a value or a positioned error, never panic.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = ebbwise::io::project::Project::from_str_at(text, std::path::Path::new("p.toml"));
    }
});
