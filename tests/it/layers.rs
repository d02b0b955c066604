//! Rules about the library's source that the compiler does not check by itself: where `anyhow`
//! may appear, that the crate roots forbid `unsafe`, and that errors are typed and may grow.

use super::repo;
use std::path::{Path, PathBuf};

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

fn library_files() -> Vec<PathBuf> {
    let mut v = Vec::new();
    for layer in ["compute", "io", "run"] {
        rust_files(&repo().join("src").join(layer), &mut v);
    }
    v.push(repo().join("src/lib.rs"));
    v
}

#[test]
fn anyhow_stays_in_the_binaries() {
    for f in library_files() {
        let text = std::fs::read_to_string(&f).unwrap();
        assert!(!text.contains("anyhow"), "{} names anyhow", f.display());
    }
}

#[test]
fn the_library_returns_no_string_errors() {
    for f in library_files() {
        let text = std::fs::read_to_string(&f).unwrap();
        for (n, line) in text.lines().enumerate() {
            let squeezed: String = line.chars().filter(|c| !c.is_whitespace()).collect();
            assert!(
                !(squeezed.contains("Result<") && squeezed.contains(",String>")),
                "{}:{}: {line}",
                f.display(),
                n + 1
            );
        }
    }
}

#[test]
fn the_crate_roots_forbid_unsafe_code() {
    for root in ["src/lib.rs", "src/main.rs", "src/bin/ebbwise_demo_gen.rs"] {
        let text = std::fs::read_to_string(repo().join(root)).unwrap();
        assert!(
            text.lines().any(|l| l.trim() == "#![forbid(unsafe_code)]"),
            "{root}"
        );
    }
}

#[test]
fn public_error_enums_are_non_exhaustive() {
    let mut seen = 0;
    for f in library_files() {
        let text = std::fs::read_to_string(&f).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        for (i, l) in lines.iter().enumerate() {
            let Some(rest) = l.trim().strip_prefix("pub enum ") else {
                continue;
            };
            let name: String = rest
                .chars()
                .take_while(|c| c.is_alphanumeric() || *c == '_')
                .collect();
            if !name.ends_with("Error") {
                continue;
            }
            seen += 1;
            // The attributes directly above the enum.
            let attrs = lines[..i]
                .iter()
                .rev()
                .take_while(|a| a.trim_start().starts_with("#["));
            assert!(
                attrs.clone().any(|a| a.trim() == "#[non_exhaustive]"),
                "{}: {name}",
                f.display()
            );
        }
    }
    // IoError, TimeError, CrsError, AnalysisError, LocatorError, HarmonicsError.
    assert!(seen >= 6, "{seen} error enums found");
}
