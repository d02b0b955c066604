//! Results do not depend on the number of threads or on how the soundings are split across files.

use super::{ebbwise, repo, stderr};

fn demo_project() -> String {
    repo()
        .join("zoning-demo/project.toml")
        .to_string_lossy()
        .into_owned()
}

/// The QA report without the one field that changes from run to run, the time it was made.
fn without_run_time(json: &[u8]) -> serde_json::Value {
    let mut v: serde_json::Value = serde_json::from_slice(json).unwrap();
    let p = v["provenance"].as_object_mut().unwrap();
    assert!(p.remove("created_utc").is_some());
    v
}

#[test]
fn output_does_not_depend_on_thread_count() {
    let d = tempfile::tempdir().unwrap();
    let mut outputs = Vec::new();
    for threads in ["1", "2", "3"] {
        let out = d.path().join(threads);
        let o = ebbwise(&[
            "reduce",
            &demo_project(),
            "--out",
            out.to_str().unwrap(),
            "--threads",
            threads,
            "--no-progress",
        ]);
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        outputs.push((
            std::fs::read(out.join("launch-a.reduced.csv")).unwrap(),
            std::fs::read(out.join("launch-b.reduced.csv")).unwrap(),
            without_run_time(&std::fs::read(out.join("qa-report.json")).unwrap()),
            std::fs::read(out.join("failing-soundings.geojson")).unwrap(),
            std::fs::read(out.join("unreduced-soundings.geojson")).unwrap(),
        ));
    }
    assert!(
        outputs[0] == outputs[1] && outputs[1] == outputs[2],
        "outputs differ between thread counts"
    );
}

#[test]
fn output_does_not_depend_on_how_soundings_are_split_across_files() {
    let d = tempfile::tempdir().unwrap();
    let demo = repo().join("zoning-demo");
    let text = std::fs::read_to_string(demo.join("soundings/launch-a.csv")).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap();
    let rows: Vec<&str> = lines.collect();
    let cut = rows.len() / 3;
    let part = |name: &str, rows: &[&str]| {
        let p = d.path().join(name);
        std::fs::write(&p, format!("{header}\n{}\n", rows.join("\n"))).unwrap();
        p.to_string_lossy().into_owned()
    };
    let (p1, p2) = (
        part("part1.csv", &rows[..cut]),
        part("part2.csv", &rows[cut..]),
    );
    let project = super::demo_project_with_absolute_paths().replace(
        &format!(
            "files = [\"{}\"]",
            demo.join("soundings/launch-a.csv").display()
        ),
        &format!("files = [\"{p1}\", \"{p2}\"]"),
    );
    assert!(project.contains("part1.csv"), "the launch-a group is split");
    let split_project = d.path().join("split.toml");
    std::fs::write(&split_project, project).unwrap();
    let o = ebbwise(&[
        "reduce",
        split_project.to_str().unwrap(),
        "--out",
        d.path().join("split").to_str().unwrap(),
        "--no-progress",
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let o = ebbwise(&[
        "reduce",
        &demo_project(),
        "--out",
        d.path().join("whole").to_str().unwrap(),
        "--no-progress",
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let whole = std::fs::read_to_string(d.path().join("whole/launch-a.reduced.csv")).unwrap();
    let a = std::fs::read_to_string(d.path().join("split/part1.reduced.csv")).unwrap();
    let b = std::fs::read_to_string(d.path().join("split/part2.reduced.csv")).unwrap();
    let joined = format!("{a}{}", b.split_once('\n').unwrap().1);
    assert_eq!(joined.lines().count(), whole.lines().count());
    assert!(joined == whole, "split and whole reductions differ");
    // The survey verdict is the same too.
    let q = |p: &str| -> serde_json::Value {
        serde_json::from_slice(&std::fs::read(d.path().join(p)).unwrap()).unwrap()
    };
    assert_eq!(
        q("split/qa-report.json")["survey"],
        q("whole/qa-report.json")["survey"]
    );
}
