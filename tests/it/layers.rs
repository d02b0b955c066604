//! Rules about the library's source that the compiler does not check by itself: what each layer
//! may name (docs/ARCHITECTURE.md, "Architecture invariants"), where `anyhow` may appear, that the
//! crate roots forbid `unsafe`, that errors are typed and may grow, and that the architecture's
//! code map has a heading for every module.
//!
//! The source files are read as text. A layer rule looks at code lines: whole-line comments are
//! skipped, and so are a file's unit-test modules (`#[cfg(test)] mod … {`, which rustfmt closes
//! with a `}` in column 0) where the rule says so.

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

fn layer_files(layer: &str) -> Vec<PathBuf> {
    let mut v = Vec::new();
    rust_files(&repo().join("src").join(layer), &mut v);
    v.sort();
    assert!(!v.is_empty(), "no source files in src/{layer}");
    v
}

/// The code lines of a source text with their 1-based numbers: whole-line comments left out, and
/// unit-test modules too unless `with_tests`.
fn code_lines(text: &str, with_tests: bool) -> Vec<(usize, &str)> {
    let lines: Vec<&str> = text.lines().collect();
    let mut out = Vec::new();
    let mut i = 0;
    while i < lines.len() {
        let line = lines[i];
        if !with_tests && line == "#[cfg(test)]" {
            // The item the attribute applies to, past any further attributes.
            let mut j = i + 1;
            while j < lines.len() && lines[j].starts_with("#[") {
                j += 1;
            }
            if j < lines.len() && lines[j].starts_with("mod ") && lines[j].ends_with('{') {
                while j < lines.len() && lines[j] != "}" {
                    j += 1;
                }
                i = j + 1;
                continue;
            }
        }
        if !line.trim_start().starts_with("//") {
            out.push((i + 1, line));
        }
        i += 1;
    }
    out
}

/// Every code line of `files` that names one of `forbidden`, as `file:line: text`.
fn naming(files: &[PathBuf], forbidden: &[&str], with_tests: bool) -> Vec<String> {
    let mut found = Vec::new();
    for f in files {
        let text = std::fs::read_to_string(f).unwrap();
        for (n, line) in code_lines(&text, with_tests) {
            // The first word found is enough (`println!` also holds `print!`).
            if let Some(word) = forbidden.iter().find(|w| line.contains(*w)) {
                found.push(format!(
                    "{}:{n}: names `{word}`: {}",
                    f.display(),
                    line.trim()
                ));
            }
        }
    }
    found
}

#[test]
fn the_line_filter_skips_comments_and_test_modules_only() {
    // A made-up file: code, a comment, a test module, code after it.
    let text = "use a;\n// use b;\n#[cfg(test)]\nmod tests {\n    use c;\n}\nuse d;\n";
    let without: Vec<usize> = code_lines(text, false).iter().map(|l| l.0).collect();
    assert_eq!(without, [1, 7]);
    let with: Vec<usize> = code_lines(text, true).iter().map(|l| l.0).collect();
    assert_eq!(with, [1, 3, 4, 5, 6, 7]);
    // A cfg(test) item that is not a module is code like any other.
    let item = "#[cfg(test)]\nfn helper() {}\n";
    assert_eq!(code_lines(item, false).len(), 2);
}

/// What the core must not name outside its unit tests: file and environment access, the
/// readers' and the binary's crates, PROJ, and printing.
const NOT_IN_THE_CORE: [&str; 10] = [
    "std::fs",
    "std::env",
    "csv::",
    "clap",
    "proj::",
    "eprintln!",
    "println!",
    "eprint!",
    "print!",
    "stdout()",
];

#[test]
fn the_core_does_no_io_and_prints_nothing() {
    let found = naming(&layer_files("compute"), &NOT_IN_THE_CORE, false);
    assert!(found.is_empty(), "{}", found.join("\n"));
}

#[test]
fn the_core_names_no_other_layer() {
    // Tests included: a core test that needs io or run belongs in tests/it.
    let found = naming(
        &layer_files("compute"),
        &["crate::io", "crate::run", "ebbwise::"],
        true,
    );
    assert!(found.is_empty(), "{}", found.join("\n"));
}

#[test]
fn io_depends_on_neither_run_nor_cli() {
    let found = naming(
        &layer_files("io"),
        &[
            "crate::run",
            "crate::cli",
            "ebbwise::run",
            "super::super::run",
        ],
        true,
    );
    assert!(found.is_empty(), "{}", found.join("\n"));
}

#[test]
fn io_and_run_parse_no_arguments_and_print_nothing() {
    let mut files = layer_files("io");
    files.extend(layer_files("run"));
    let found = naming(
        &files,
        &[
            "clap",
            "std::env::args",
            "eprintln!",
            "println!",
            "eprint!",
            "print!",
            "stdout()",
            "stderr()",
        ],
        false,
    );
    assert!(found.is_empty(), "{}", found.join("\n"));
}

#[test]
fn the_code_map_has_one_heading_for_every_module() {
    let arch = std::fs::read_to_string(repo().join("docs/ARCHITECTURE.md")).unwrap();
    let map = arch
        .split("\n## Code map\n")
        .nth(1)
        .and_then(|rest| rest.split("\n## ").next())
        .expect("docs/ARCHITECTURE.md has a '## Code map' section");
    // Module paths named in the section's headings, each as often as it is named.
    let mut named: Vec<String> = Vec::new();
    for h in map.lines().filter(|l| l.starts_with("###")) {
        for (k, part) in h.split('`').enumerate() {
            if k % 2 == 1 {
                named.push(part.to_string());
            }
        }
    }
    let mut modules: Vec<String> = Vec::new();
    for layer in ["compute", "io", "run", "cli"] {
        for f in layer_files(layer) {
            let stem = f.file_stem().unwrap().to_string_lossy().into_owned();
            modules.push(if stem == "mod" {
                layer.to_string()
            } else {
                format!("{layer}::{stem}")
            });
        }
    }
    for m in &modules {
        // A layer's own mod.rs needs a heading only for the binary (`cli`).
        if !m.contains("::") && m != "cli" {
            continue;
        }
        let n = named.iter().filter(|x| *x == m).count();
        assert_eq!(
            n, 1,
            "docs/ARCHITECTURE.md's code map names `{m}` in {n} headings"
        );
    }
    for x in &named {
        let is_layer_path = ["compute", "io", "run", "cli"]
            .iter()
            .any(|l| x == l || x.starts_with(&format!("{l}::")));
        assert!(
            !is_layer_path || modules.contains(x),
            "docs/ARCHITECTURE.md's code map has a heading for `{x}`, which is no module"
        );
    }
}

#[test]
fn anyhow_stays_in_the_binaries() {
    for f in library_files() {
        let text = std::fs::read_to_string(&f).unwrap();
        assert!(!text.contains("anyhow"), "{} names anyhow", f.display());
    }
}

/// The command-line programs' dependencies are optional, behind the default `cli` feature, and
/// the library (outside its unit tests) names none of them: a library user who builds with
/// `default-features = false` builds none of them.
#[test]
fn the_cli_dependencies_stay_behind_the_cli_feature() {
    let cli_only = [
        "clap",
        "indicatif",
        "rand",
        "rand_chacha",
        "rand_distr",
        "anyhow",
    ];
    let manifest: toml::Value =
        toml::from_str(&std::fs::read_to_string(repo().join("Cargo.toml")).unwrap()).unwrap();
    let cli: Vec<&str> = manifest["features"]["cli"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    assert_eq!(manifest["features"]["default"][0].as_str(), Some("cli"));
    for dep in cli_only {
        assert_eq!(
            manifest["dependencies"][dep]["optional"].as_bool(),
            Some(true),
            "{dep} is not optional"
        );
        assert!(
            cli.contains(&format!("dep:{dep}").as_str()),
            "{dep} not in the cli feature"
        );
    }
    for bin in manifest["bin"].as_array().unwrap() {
        assert_eq!(bin["required-features"][0].as_str(), Some("cli"), "{bin:?}");
    }
    let names: Vec<String> = cli_only.iter().map(|d| format!("{d}::")).collect();
    let names: Vec<&str> = names.iter().map(String::as_str).collect();
    let found = naming(&library_files(), &names, false);
    assert!(found.is_empty(), "{found:#?}");
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
