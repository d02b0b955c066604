//! The bad-input suite: each folder of tests/bad-input holds small files laid over the mini
//! project and `expect.toml`, the exact outcome: the command, its exit status, lines stderr must
//! contain, and (for reductions) each output row's status and status_detail in order.

use super::{ebbwise, read_csv, repo, stderr, MiniProject};

#[derive(serde::Deserialize)]
struct Expect {
    command: String,
    exit: i32,
    stderr: Vec<String>,
    rows: Option<Vec<(String, String)>>,
}

#[test]
fn every_bad_input_case_gives_its_exact_outcome() {
    let dir = repo().join("tests/bad-input");
    let mut cases: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    cases.sort();
    // The suite only grows: a case folder lost in a merge or a rename fails here.
    assert!(cases.len() >= 57, "{} cases", cases.len());
    let mut failures = Vec::new();
    for case in &cases {
        let name = case.file_name().unwrap().to_string_lossy().into_owned();
        let expect: Expect =
            toml::from_str(&std::fs::read_to_string(case.join("expect.toml")).unwrap()).unwrap();
        let p = MiniProject::new("");
        for f in std::fs::read_dir(case).unwrap() {
            let f = f.unwrap().path();
            let fname = f.file_name().unwrap().to_string_lossy().into_owned();
            if fname != "expect.toml" {
                std::fs::write(p.path(&fname), std::fs::read(&f).unwrap()).unwrap();
            }
        }
        let o = ebbwise(&[&expect.command, &p.project()]);
        let err = stderr(&o);
        if o.status.code() != Some(expect.exit) {
            failures.push(format!(
                "{name}: exit {:?}, expected {}\n{err}",
                o.status.code(),
                expect.exit
            ));
            continue;
        }
        for want in &expect.stderr {
            if !err.contains(want.as_str()) {
                failures.push(format!("{name}: stderr lacks '{want}'\n{err}"));
            }
        }
        if let Some(rows) = &expect.rows {
            let (h, got) = read_csv(&p.path("out/s.reduced.csv"));
            let st = h.iter().position(|c| c == "status").unwrap();
            let de = h.iter().position(|c| c == "status_detail").unwrap();
            let got: Vec<(String, String)> =
                got.iter().map(|r| (r[st].clone(), r[de].clone())).collect();
            if &got != rows {
                failures.push(format!("{name}: rows {got:?}, expected {rows:?}"));
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

#[test]
fn a_megabyte_line_is_one_bad_row_with_a_short_message() {
    let long = "9".repeat(1 << 20);
    let p = MiniProject::new(&format!(
        "time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,{long},L1\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n"
    ));
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let (h, rows) = read_csv(&p.path("out/s.reduced.csv"));
    let de = h.iter().position(|c| c == "status_detail").unwrap();
    assert_eq!(rows.len(), 2);
    assert_eq!(
        rows[0][de],
        format!(
            "field 'depth': expected a depth in metres (finite), found '{}… (1048576 bytes)'",
            "9".repeat(40)
        )
    );
    assert_eq!(
        rows[1][h.iter().position(|c| c == "status").unwrap()],
        "reduced"
    );
}

#[test]
fn docs_robustness_lists_every_case_with_its_outcome_and_messages() {
    let doc = std::fs::read_to_string(repo().join("docs/robustness.md")).unwrap();
    let dir = repo().join("tests/bad-input");
    let mut missing = Vec::new();
    for case in std::fs::read_dir(&dir).unwrap() {
        let case = case.unwrap().path();
        let name = case.file_name().unwrap().to_string_lossy().into_owned();
        let expect: Expect =
            toml::from_str(&std::fs::read_to_string(case.join("expect.toml")).unwrap()).unwrap();
        let head = format!(
            "| `{name}` | `ebbwise {}` → {} |",
            expect.command, expect.exit
        );
        let Some(row) = doc.lines().find(|l| l.starts_with(&head)) else {
            missing.push(format!("{name}: no row starting '{head}'"));
            continue;
        };
        // Each message the case expects is shown (its first 40 characters at least); excerpts
        // of the run summary's table (aligned columns) are not messages.
        let messages = expect
            .stderr
            .iter()
            .filter(|m| !m.contains("   "))
            .cloned()
            .chain(
                expect
                    .rows
                    .iter()
                    .flatten()
                    .map(|(_, detail)| detail.clone()),
            );
        for m in messages.filter(|m| !m.is_empty()) {
            let start: String = m.chars().take(40).collect();
            if !row.contains(&start) {
                missing.push(format!("{name}: row lacks '{start}'"));
            }
        }
    }
    assert!(missing.is_empty(), "{}", missing.join("\n"));
}
