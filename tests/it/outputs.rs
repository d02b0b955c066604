//! Outputs appear whole or not at all, reruns are byte-identical, inputs are never overwritten.

use super::{neap, stderr, MiniProject, MINI_PROJECT};

const S: &str = "time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n2026-06-14T01:06:00Z,10.015,50.005,12.0,L1\n";

#[test]
fn rerun_is_byte_identical_and_stale_temporaries_are_removed() {
    let p = MiniProject::new(S);
    assert_eq!(
        neap(&["reduce", &p.project(), "--no-progress"])
            .status
            .code(),
        Some(0)
    );
    let first = std::fs::read(p.path("out/s.reduced.csv")).unwrap();
    std::fs::write(
        p.path("out/.s.reduced.csv.neap-partial"),
        b"left by a killed run",
    )
    .unwrap();
    let out = neap(&["reduce", &p.project(), "--no-progress", "--threads", "1"]);
    assert!(
        stderr(&out).contains("removed 1 temporary file(s) left by an interrupted run"),
        "{}",
        stderr(&out)
    );
    assert_eq!(std::fs::read(p.path("out/s.reduced.csv")).unwrap(), first);
    assert!(!p.path("out/.s.reduced.csv.neap-partial").exists());
}

#[test]
fn output_folder_equal_to_input_folder_never_overwrites_inputs() {
    // A soundings file named like an output of another: s.csv → s.reduced.csv, and an input
    // called s.reduced.csv in the same folder would be overwritten: neap refuses.
    let p = MiniProject::new(S);
    std::fs::write(p.path("s.reduced.csv"), S).unwrap();
    p.write(
        "project.toml",
        &MINI_PROJECT
            .replace("dir = \"out\"", "dir = \".\"")
            .replace(
                "files = [\"s.csv\"]",
                "files = [\"s.csv\", \"s.reduced.csv\"]",
            ),
    );
    let out = neap(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    assert!(
        stderr(&out).contains("refusing to overwrite an input file"),
        "{}",
        stderr(&out)
    );
    assert_eq!(std::fs::read_to_string(p.path("s.reduced.csv")).unwrap(), S);
}
