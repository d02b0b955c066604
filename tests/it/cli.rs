//! The command line as a whole: `help`, the output convention (the human summary on stderr,
//! data on stdout only for `-`), `demo`'s folder and exit status, and where `--order` errors
//! point.

use std::path::Path;

use super::{ebbwise, ebbwise_in, repo, stderr, stdout, MiniProject, MINI_PROJECT};

/// Two soundings, one in each zone of the mini project, both inside g1's record.
const GOOD: &str = "time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n2026-06-14T01:10:00Z,10.015,50.005,10.0,L1\n";

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

// ---------------------------------------------------------------------------------------------
// help

#[test]
fn help_help_prints_the_help_of_help() {
    let o = ebbwise(&["help", "--help"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stdout(&o).contains("Usage: ebbwise help [COMMAND]"),
        "{}",
        stdout(&o)
    );
    assert!(stderr(&o).is_empty(), "{}", stderr(&o));
}

#[test]
fn help_of_a_command_is_that_commands_help() {
    for command in ["reduce", "qc", "predict", "analyze"] {
        let via_help = ebbwise(&["help", command]);
        let via_flag = ebbwise(&[command, "--help"]);
        assert_eq!(via_help.status.code(), Some(0), "{command}");
        assert_eq!(stdout(&via_help), stdout(&via_flag), "{command}");
        assert!(!stdout(&via_help).is_empty(), "{command}");
    }
    let o = ebbwise(&["help", "nosuch"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("'nosuch'"), "{}", stderr(&o));
}

// ---------------------------------------------------------------------------------------------
// The output convention

/// Asserts that a run succeeded (exit `code`), printed nothing on stdout and `summary` on stderr.
fn summary_on_stderr_only(o: &std::process::Output, code: i32, summary: &str) {
    assert_eq!(o.status.code(), Some(code), "{}", stderr(o));
    assert!(o.stdout.is_empty(), "stdout: {}", stdout(o));
    assert!(stderr(o).contains(summary), "{}", stderr(o));
}

#[test]
fn project_commands_print_their_summary_on_stderr_and_nothing_on_stdout() {
    let p = MiniProject::new(GOOD);
    let out = p.path("out");
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    summary_on_stderr_only(&o, 0, "ebbwise reduce: mini");
    let o = ebbwise(&["check", &p.project()]);
    summary_on_stderr_only(&o, 0, "ebbwise check: 0 error(s)");
    let o = ebbwise(&["correctors", &p.project(), "--out", s(&out)]);
    summary_on_stderr_only(&o, 0, "ebbwise correctors: 2 zones");
    let o = ebbwise(&[
        "apply",
        s(&out.join("correctors-zones.csv")),
        "--project",
        &p.project(),
        "--out",
        s(&p.path("applied")),
    ]);
    summary_on_stderr_only(&o, 0, "ebbwise apply: mini");
    let o = ebbwise(&["qc", &p.project(), "--out", s(&p.path("qc"))]);
    assert!(o.stdout.is_empty(), "stdout: {}", stdout(&o));
    assert!(stderr(&o).contains("gauge g1: "), "{}", stderr(&o));
}

#[test]
fn folder_commands_refuse_stdout() {
    let p = MiniProject::new(GOOD);
    for command in ["reduce", "correctors", "qc"] {
        let o = ebbwise(&[command, &p.project(), "--out", "-"]);
        assert_eq!(o.status.code(), Some(2), "{command}");
        assert!(
            stderr(&o).contains("give a folder, not `-`"),
            "{command}: {}",
            stderr(&o)
        );
        assert!(!p.path("-").exists(), "{command} made a folder named -");
    }
}

#[test]
fn check_json_goes_to_stdout_only_with_a_dash() {
    let p = MiniProject::new(GOOD);
    // An unknown gauge in the zoning: one error.
    p.write(
        "project.toml",
        &MINI_PROJECT.replace("id = \"g1\"", "id = \"g0\""),
    );
    let o = ebbwise(&["check", &p.project(), "--json", "-"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let json: serde_json::Value = serde_json::from_slice(&o.stdout).expect("stdout is JSON");
    let errors = json["findings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["severity"] == "error")
        .count();
    assert!(errors > 0, "{json}");
    // The human summary is on stderr as well, and counts the same findings.
    assert!(
        stderr(&o).contains(&format!("ebbwise check: {errors} error(s)")),
        "{}",
        stderr(&o)
    );
    let file = p.path("findings.json");
    let o = ebbwise(&["check", &p.project(), "--json", s(&file)]);
    assert!(o.stdout.is_empty(), "{}", stdout(&o));
    let from_file: serde_json::Value =
        serde_json::from_slice(&std::fs::read(&file).unwrap()).unwrap();
    assert_eq!(from_file, json);
}

#[test]
fn analyse_and_predict_write_data_to_stdout_only_with_a_dash() {
    let d = tempfile::tempdir().unwrap();
    let record = repo().join("tests/fixtures/harmonics/record_29d.csv");
    let columns = ["--time-column", "time_utc", "--height-column", "height_m"];
    let k = d.path().join("m.constants.toml");
    let mut args = vec!["analyse", s(&record)];
    args.extend(columns);
    let o = ebbwise(&[&args[..], &["--out", s(&k)]].concat());
    summary_on_stderr_only(&o, 0, "ebbwise analyse: 696 samples");
    let o = ebbwise(&[&args[..], &["--out", "-"]].concat());
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(o.stdout, std::fs::read(&k).unwrap(), "the same constants");
    assert!(
        stderr(&o).contains("constants written to stdout"),
        "{}",
        stderr(&o)
    );

    let span = [
        "--from",
        "2026-06-14T00:00:00Z",
        "--to",
        "2026-06-15T00:00:00Z",
    ];
    let (series, turning) = (d.path().join("p.csv"), d.path().join("t.csv"));
    let mut args = vec!["predict", s(&k)];
    args.extend(span);
    let o = ebbwise(
        &[
            &args[..],
            &["--out", s(&series), "--high-low-waters", s(&turning)],
        ]
        .concat(),
    );
    summary_on_stderr_only(&o, 0, "ebbwise predict: 241 values");
    let t2 = d.path().join("t2.csv");
    let o = ebbwise(&[&args[..], &["--out", "-", "--high-low-waters", s(&t2)]].concat());
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(o.stdout, std::fs::read(&series).unwrap(), "the same series");
    assert_eq!(
        std::fs::read(&t2).unwrap(),
        std::fs::read(&turning).unwrap()
    );
    let s2 = d.path().join("s2.csv");
    let o = ebbwise(&[&args[..], &["--out", s(&s2), "--high-low-waters", "-"]].concat());
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(
        o.stdout,
        std::fs::read(&turning).unwrap(),
        "the same turning points"
    );
    let o = ebbwise(&[&args[..], &["--out", "-", "--high-low-waters", "-"]].concat());
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("cannot both be `-`"), "{}", stderr(&o));
}

/// `predict --help` names the default files; a run without --out writes exactly those.
#[test]
fn predict_writes_the_default_files_its_help_names() {
    let help = stdout(&ebbwise(&["predict", "--help"]));
    for promised in [
        "`<NAME>.prediction.csv` in the current folder",
        "`<NAME>.high-low-waters.csv` in the current folder",
        "without `.constants.toml`",
    ] {
        assert!(help.contains(promised), "{promised}: {help}");
    }
    let d = tempfile::tempdir().unwrap();
    let record = repo().join("tests/fixtures/harmonics/record_29d.csv");
    let k = d.path().join("month.constants.toml");
    let o = ebbwise(&[
        "analyse",
        s(&record),
        "--time-column",
        "time_utc",
        "--height-column",
        "height_m",
        "--out",
        s(&k),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let here = d.path().join("here");
    std::fs::create_dir(&here).unwrap();
    let o = ebbwise_in(
        &here,
        &[
            "predict",
            s(&k),
            "--from",
            "2026-06-14T00:00:00Z",
            "--to",
            "2026-06-14T12:00:00Z",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let mut written: Vec<String> = std::fs::read_dir(&here)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    written.sort();
    assert_eq!(
        written,
        ["month.high-low-waters.csv", "month.prediction.csv"]
    );

    let help = stdout(&ebbwise(&["analyse", "--help"]));
    assert!(help.contains("`<STEM>.constants.toml`"), "{help}");
    let o = ebbwise_in(
        &here,
        &[
            "analyse",
            s(&record),
            "--time-column",
            "time_utc",
            "--height-column",
            "height_m",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        here.join("record_29d.constants.toml").is_file(),
        "STEM of record_29d.csv"
    );
}

// ---------------------------------------------------------------------------------------------
// demo

#[test]
fn demo_without_a_demo_folder_says_where_it_looked() {
    let d = tempfile::tempdir().unwrap();
    let o = ebbwise_in(d.path(), &["demo"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    // The absolute path, as the child's current folder gives it.
    let looked = d
        .path()
        .canonicalize()
        .unwrap()
        .join("zoning-demo/project.toml");
    let e = stderr(&o);
    assert!(e.contains(&looked.display().to_string()), "{e}");
    assert!(e.contains("--dir"), "{e}");
    assert!(o.stdout.is_empty());
    assert_eq!(
        std::fs::read_dir(d.path()).unwrap().count(),
        0,
        "nothing written"
    );
    let o = ebbwise_in(d.path(), &["demo", "--dir", "elsewhere"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("elsewhere/project.toml"),
        "{}",
        stderr(&o)
    );
}

/// A copy of the demo's inputs (not its truth) in `dir/zoning-demo`.
fn copy_demo_inputs(dir: &Path) -> std::path::PathBuf {
    let from = repo().join("zoning-demo");
    let to = dir.join("zoning-demo");
    for sub in ["gauges", "soundings"] {
        std::fs::create_dir_all(to.join(sub)).unwrap();
        for e in std::fs::read_dir(from.join(sub)).unwrap() {
            let e = e.unwrap();
            std::fs::copy(e.path(), to.join(sub).join(e.file_name())).unwrap();
        }
    }
    for f in ["project.toml", "zoning.geojson"] {
        std::fs::copy(from.join(f), to.join(f)).unwrap();
    }
    to
}

#[test]
fn demo_exits_as_reduce_does_and_writes_beside_its_project() {
    let d = tempfile::tempdir().unwrap();
    let demo = copy_demo_inputs(d.path());
    let o = ebbwise_in(d.path(), &["demo"]);
    let r = ebbwise(&[
        "reduce",
        s(&demo.join("project.toml")),
        "--out",
        s(&d.path().join("by-reduce")),
        "--no-progress",
    ]);
    assert_eq!(o.status.code(), r.status.code(), "demo: {}", stderr(&o));
    assert!(o.stdout.is_empty(), "{}", stdout(&o));
    // Exit 1 because the run's own summary has rows that are not reduced (the planted faults).
    let summary: serde_json::Value = serde_json::from_slice(
        &std::fs::read(demo.join("out/reduce-summary.json")).expect("written in the copy"),
    )
    .unwrap();
    let by_status = summary["rows_by_status"].as_object().unwrap();
    let reduced = by_status["reduced"].as_u64().unwrap();
    let rows: u64 = by_status.values().map(|v| v.as_u64().unwrap()).sum();
    assert!(reduced < rows, "{summary}");
    assert_eq!(o.status.code(), Some(1));
    assert!(
        stderr(&o).contains("Demo survey reduced."),
        "{}",
        stderr(&o)
    );
}

// ---------------------------------------------------------------------------------------------
// --order

#[test]
fn an_unknown_order_is_blamed_on_where_it_was_given() {
    let p = MiniProject::new(GOOD);
    p.write(
        "project.toml",
        &format!("{MINI_PROJECT}\n[uncertainty]\norder = \"special\"\n"),
    );
    let o = ebbwise(&["reduce", &p.project(), "--order", "3x", "--no-progress"]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(
        e.contains("error: --order: unknown survey order '3x' (expected one of: "),
        "{e}"
    );
    assert!(!e.contains("uncertainty.order"), "{e}");
    // The same name in the project file is blamed on the file's key.
    p.write(
        "project.toml",
        &format!("{MINI_PROJECT}\n[uncertainty]\norder = \"3x\"\n"),
    );
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(
        e.contains("project.toml: field 'uncertainty.order': unknown survey order '3x'"),
        "{e}"
    );
    // `--order` replaces the file's order, so the file's unknown name is not used.
    let o = ebbwise(&["reduce", &p.project(), "--order", "1a", "--no-progress"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
}
