//! `ebbwise apply` on the demo: holes in correction files are not bridged (per zone with and
//! without a sidecar, per line, per sounding), a file without sidecar is warned about, and with
//! uncertainty the applied files and the QA report equal those of `ebbwise reduce`. On the
//! gap-filled demo, gap-filled and renormalised soundings come out of every kind of correction
//! file with the status, detail, tide and uncertainties of `ebbwise reduce`, and a changed
//! `[gap_fill]` table is refused.

use std::path::Path;

use super::{ebbwise, read_csv, repo, stderr};

fn demo() -> String {
    repo()
        .join("zoning-demo/project.toml")
        .to_string_lossy()
        .into_owned()
}

fn launch_a() -> String {
    repo()
        .join("zoning-demo/soundings/launch-a.csv")
        .to_string_lossy()
        .into_owned()
}

fn s(p: &Path) -> String {
    p.to_string_lossy().into_owned()
}

/// Writes a CSV (the test's files have no quoted fields).
fn write_csv(path: &Path, header: &[String], rows: &[Vec<String>]) {
    let mut t = header.join(",");
    t.push('\n');
    for r in rows {
        t.push_str(&r.join(","));
        t.push('\n');
    }
    std::fs::create_dir_all(path.parent().unwrap()).unwrap();
    std::fs::write(path, t).unwrap();
}

fn col(h: &[String], name: &str) -> usize {
    h.iter()
        .position(|x| x == name)
        .unwrap_or_else(|| panic!("no column {name}"))
}

/// `2026-06-14T09:30:00.000Z` (a data column) as messages write it, `2026-06-14T09:30:00Z`.
fn label(t: &str) -> String {
    t.replace(".000Z", "Z")
}

/// Runs `ebbwise apply` and returns its stderr (exit 1: the demo always has soundings that are
/// not reduced).
fn apply(file: &Path, out: &Path, extra: &[&str]) -> String {
    let mut args = vec!["apply".to_string(), s(file)];
    args.extend(extra.iter().map(|x| x.to_string()));
    args.extend(["--project".into(), demo(), "--out".into(), s(out)]);
    let a: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = ebbwise(&a);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    stderr(&o)
}

fn summary(out: &Path) -> serde_json::Value {
    serde_json::from_slice(&std::fs::read(out.join("apply-summary.json")).unwrap()).unwrap()
}

/// The hole test shared by the per-zone and per-line files: with rows of one series removed
/// (`apart` says how far apart the rows left are), every launch-A sounding strictly inside is then
/// `no_gauge_data` with the file, both times and the step in its detail, every other row is as
/// from the whole file, and the summary counts them. Returns the number of soundings in the hole.
#[allow(clippy::too_many_arguments)]
fn check_hole(
    base: &Path,
    holed_file: &Path,
    holed_out: &Path,
    from: &str,
    to: &str,
    in_hole: impl Fn(&[String], &[String]) -> bool,
    (apart, step_phrase): (&str, &str),
) -> usize {
    let (h, whole) = read_csv(&base.join("launch-a.applied.csv"));
    let (h2, holed) = read_csv(&holed_out.join("launch-a.applied.csv"));
    assert_eq!(h, h2);
    let (st, det) = (col(&h, "status"), col(&h, "status_detail"));
    let mut n = 0;
    for (a, b) in whole.iter().zip(&holed) {
        if a[st] == "reduced" && in_hole(&h, a) {
            n += 1;
            assert_eq!(b[st], "no_gauge_data", "{a:?}");
            for part in [
                s(holed_file),
                label(from),
                label(to),
                apart.into(),
                "step of 1 min".into(),
                step_phrase.into(),
            ] {
                assert!(b[det].contains(&part), "'{}' lacks '{part}'", b[det]);
            }
        } else {
            assert_eq!(a, b, "outside the hole the row is unchanged");
        }
    }
    // Counted like every other status that is not `reduced`.
    let count = |v: &serde_json::Value, st: &str| {
        v["files"]
            .as_array()
            .unwrap()
            .iter()
            .find(|f| f["input"].as_str().unwrap().ends_with("launch-a.csv"))
            .unwrap()["rows_by_status"][st]
            .as_u64()
            .unwrap()
    };
    let (sw, sh) = (summary(base), summary(holed_out));
    assert_eq!(
        count(&sh, "no_gauge_data"),
        count(&sw, "no_gauge_data") + n as u64
    );
    assert_eq!(count(&sh, "reduced"), count(&sw, "reduced") - n as u64);
    n
}

/// Removes `before + after` consecutive rows of the series whose `key_col` is `key`: the
/// `before` rows up to the row at or just before `t` (a data-column time) and the `after` rows
/// after it; returns the rows left and the times on each side.
fn cut_hole(
    h: &[String],
    rows: &[Vec<String>],
    (key_col, key): (&str, &str),
    t: &str,
    (before, after): (usize, usize),
) -> (Vec<Vec<String>>, String, String) {
    let (kc, tc) = (col(h, key_col), col(h, "time_utc"));
    let idx: Vec<usize> = (0..rows.len()).filter(|&i| rows[i][kc] == key).collect();
    let k = idx
        .iter()
        .rposition(|&i| rows[i][tc].as_str() <= t)
        .expect("a row before the sounding");
    assert!(
        k >= before && k + after + 1 < idx.len(),
        "the hole fits in the series"
    );
    let gone: std::collections::HashSet<usize> =
        idx[k + 1 - before..=k + after].iter().copied().collect();
    let kept = (0..rows.len())
        .filter(|i| !gone.contains(i))
        .map(|i| rows[i].clone())
        .collect();
    (
        kept,
        rows[idx[k - before]][tc].clone(),
        rows[idx[k + after + 1]][tc].clone(),
    )
}

/// A reduced sounding of launch A in the middle of the file: (zone, line, time).
fn middle_sounding(base: &Path) -> (String, String, String) {
    let (h, rows) = read_csv(&base.join("launch-a.applied.csv"));
    let r = rows[rows.len() / 2..]
        .iter()
        .find(|r| r[col(&h, "status")] == "reduced")
        .unwrap();
    (
        r[col(&h, "zone")].clone(),
        r[col(&h, "line")].clone(),
        r[col(&h, "time")].clone(),
    )
}

#[test]
fn a_hole_in_a_per_zone_file_is_not_bridged_with_or_without_sidecar() {
    let d = tempfile::tempdir().unwrap();
    let p = |x: &str| d.path().join(x);
    let o = ebbwise(&[
        "correctors",
        &demo(),
        "--out",
        &s(&p("c")),
        "--step-min",
        "1",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let whole = p("c/correctors-zones.csv");
    let err = apply(&whole, &p("base"), &[&launch_a()]);
    assert!(!err.contains("no sidecar"), "{err}");
    let (zone, _, t) = middle_sounding(&p("base"));
    let (h, rows) = read_csv(&whole);
    // 80 rows removed: the rows left on each side are 81 min apart.
    let (kept, from, to) = cut_hole(&h, &rows, ("zone", &zone), &t, (40, 40));
    let in_hole = |h: &[String], r: &[String]| {
        let t = r[col(h, "time")].as_str();
        r[col(h, "zone")] == zone && t > from.as_str() && t < to.as_str()
    };
    // With the sidecar (copied beside the holed file): its step_min is the step.
    let holed = p("hole/correctors-zones.csv");
    write_csv(&holed, &h, &kept);
    std::fs::copy(
        p("c/correctors-zones.csv.json"),
        p("hole/correctors-zones.csv.json"),
    )
    .unwrap();
    let err = apply(&holed, &p("out-sidecar"), &[&launch_a()]);
    assert!(!err.contains("no sidecar"), "{err}");
    let n = check_hole(
        &p("base"),
        &holed,
        &p("out-sidecar"),
        &from,
        &to,
        in_hole,
        ("81 min apart", "stated by its sidecar"),
    );
    eprintln!("per-zone hole {from} to {to} in zone {zone}: {n} soundings not reduced");
    assert!(n > 100, "the hole holds soundings: {n}");
    // Without a sidecar: the step is the rows' most common interval, and apply warns.
    let bare = p("bare/correctors-zones.csv");
    write_csv(&bare, &h, &kept);
    let err = apply(&bare, &p("out-bare"), &[&launch_a()]);
    let n2 = check_hole(
        &p("base"),
        &bare,
        &p("out-bare"),
        &from,
        &to,
        in_hole,
        ("81 min apart", "the most common interval of its rows"),
    );
    assert_eq!(n, n2);
    let warnings = summary(&p("out-bare"))["warnings"].clone();
    for w in ["has no sidecar", "no stated step"] {
        assert!(err.contains("warning:") && err.contains(w), "{err}");
        assert!(
            warnings
                .as_array()
                .unwrap()
                .iter()
                .any(|x| x.as_str().unwrap().contains(w)),
            "{warnings}"
        );
    }
    // With the sidecar the summary has no warnings at all.
    assert!(summary(&p("out-sidecar")).get("warnings").is_none());
}

#[test]
fn a_hole_in_a_per_line_file_is_not_bridged() {
    let d = tempfile::tempdir().unwrap();
    let p = |x: &str| d.path().join(x);
    let o = ebbwise(&["correctors", &demo(), "--out", &s(&p("c")), "--per-line"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let whole = p("c/correctors-lines.csv");
    apply(&whole, &p("base"), &[&launch_a()]);
    // The demo's lines last at most 34 min: rows 07:31 to 08:01 of line A-001 removed leave
    // rows 32 min apart.
    let line = "A-001";
    let (h, rows) = read_csv(&whole);
    let (kept, from, to) = cut_hole(
        &h,
        &rows,
        ("line", line),
        "2026-06-14T07:31:00.000Z",
        (1, 30),
    );
    let holed = p("hole/correctors-lines.csv");
    write_csv(&holed, &h, &kept);
    std::fs::copy(
        p("c/correctors-lines.csv.json"),
        p("hole/correctors-lines.csv.json"),
    )
    .unwrap();
    apply(&holed, &p("out"), &[&launch_a()]);
    // 32 min between the rows left: longer than the step and than the demo gauges'
    // max_gap_min of 30.
    let n = check_hole(
        &p("base"),
        &holed,
        &p("out"),
        &from,
        &to,
        |h, r| {
            let t = r[col(h, "time")].as_str();
            r[col(h, "line")] == line && t > from.as_str() && t < to.as_str()
        },
        ("32 min apart", "stated by its sidecar"),
    );
    eprintln!("per-line hole {from} to {to} on line {line}: {n} soundings not reduced");
    assert!(n > 100, "{n}");
}

#[test]
fn a_hole_in_a_per_sounding_file_leaves_those_soundings_unreduced() {
    let d = tempfile::tempdir().unwrap();
    let p = |x: &str| d.path().join(x);
    let o = ebbwise(&[
        "correctors",
        &demo(),
        "--out",
        &s(&p("c")),
        "--per-sounding",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let whole = p("c/launch-a.correctors.csv");
    apply(&whole, &p("base"), &[&launch_a()]);
    let (_, line, t) = middle_sounding(&p("base"));
    // Rows of that line over the 80 minutes after the sounding's time (1-s soundings: far
    // longer than the gauges' max_gap_min of 30).
    let (h, rows) = read_csv(&whole);
    let (lc, tc) = (col(&h, "line"), col(&h, "time_utc"));
    let t0: String = t.clone();
    let end = {
        // 80 minutes later, as text: the demo's launch A runs within one day.
        let (hh, mm): (u32, u32) = (t0[11..13].parse().unwrap(), t0[14..16].parse().unwrap());
        let m = hh * 60 + mm + 80;
        format!("{}{:02}:{:02}{}", &t0[..11], m / 60, m % 60, &t0[16..])
    };
    let gone = |r: &Vec<String>| r[lc] == line && r[tc] >= t0 && r[tc] < end;
    let kept: Vec<Vec<String>> = rows.iter().filter(|r| !gone(r)).cloned().collect();
    let n_gone = rows.len() - kept.len();
    let holed = p("hole/launch-a.correctors.csv");
    write_csv(&holed, &h, &kept);
    std::fs::copy(
        p("c/launch-a.correctors.csv.json"),
        p("hole/launch-a.correctors.csv.json"),
    )
    .unwrap();
    apply(&holed, &p("out"), &[&launch_a()]);
    let (ha, a) = read_csv(&p("base/launch-a.applied.csv"));
    let (_, b) = read_csv(&p("out/launch-a.applied.csv"));
    let (st, det, tt, ll) = (
        col(&ha, "status"),
        col(&ha, "status_detail"),
        col(&ha, "time"),
        col(&ha, "line"),
    );
    let mut n = 0;
    for (x, y) in a.iter().zip(&b) {
        if x[ll] == line && x[tt] >= t0 && x[tt] < end {
            if x[st] == "reduced" {
                n += 1;
            }
            assert_eq!(y[st], "no_gauge_data", "{x:?}");
            assert!(
                y[det].contains("no row for this line and time"),
                "{}",
                y[det]
            );
        } else {
            assert_eq!(x, y);
        }
    }
    eprintln!("per-sounding hole: {n_gone} rows removed, {n} reduced soundings no longer reduced");
    assert!(n > 1000, "{n}");
}

#[test]
fn apply_with_uncertainty_equals_reduce_in_every_column_and_the_qa_report() {
    let d = tempfile::tempdir().unwrap();
    let p = |x: &str| d.path().join(x);
    let o = ebbwise(&[
        "reduce",
        &demo(),
        "--out",
        &s(&p("direct")),
        "--no-progress",
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let o = ebbwise(&[
        "correctors",
        &demo(),
        "--out",
        &s(&p("c")),
        "--per-sounding",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // One per-sounding file for both launches (their lines differ, so the keys do).
    let (h, mut rows) = read_csv(&p("c/launch-a.correctors.csv"));
    let (hb, rows_b) = read_csv(&p("c/launch-b.correctors.csv"));
    assert_eq!(h, hb);
    rows.extend(rows_b);
    let merged = p("m/both.correctors.csv");
    write_csv(&merged, &h, &rows);
    let err = apply(&merged, &p("sound"), &[]);
    // The merged file has no sidecar: warned on stderr and in the summary.
    assert!(
        err.contains("warning:") && err.contains("has no sidecar"),
        "{err}"
    );
    assert!(summary(&p("sound"))["warnings"][0]
        .as_str()
        .unwrap()
        .contains("has no sidecar"));
    let o = apply(&p("c/correctors-zones.csv"), &p("zones"), &[]);
    assert!(!o.contains("has no sidecar"), "{o}");
    for name in ["launch-a", "launch-b"] {
        let (hd, direct) = read_csv(&p(&format!("direct/{name}.reduced.csv")));
        let (hs, sound) = read_csv(&p(&format!("sound/{name}.applied.csv")));
        let (hz, zones) = read_csv(&p(&format!("zones/{name}.applied.csv")));
        assert_eq!(hd, hs, "{name}: same columns, uncertainty columns included");
        assert_eq!(hd, hz);
        assert!(hd.contains(&"u95_tvu_m".to_string()));
        let (st, det) = (col(&hd, "status"), col(&hd, "status_detail"));
        // Per-sounding file: every column equal; the reason of a row not reduced names the
        // correction file instead of the gauge.
        let mut reduced = 0;
        for (a, b) in direct.iter().zip(&sound) {
            for c in 0..hd.len() {
                if c != det || a[st] == "reduced" {
                    assert_eq!(a[c], b[c], "{name}: column {}", hd[c]);
                }
            }
            reduced += usize::from(a[st] == "reduced");
        }
        assert!(reduced > 30_000, "{name}: {reduced}");
        // Per-zone file (1-min step): the tide and each uncertainty interpolated linearly
        // between rows; bounded as documented in docs/correctors.md (tide within 1 mm,
        // uncertainties within 0.5 mm, verdicts differing only where u95 or the allowed
        // value as written differs).
        let mut worst = vec![0.0f64; hd.len()];
        let mut verdicts = 0;
        for (a, b) in direct.iter().zip(&zones) {
            assert_eq!(a[st], b[st], "{name}: same statuses");
            if a[st] != "reduced" {
                continue;
            }
            for c in col(&hd, "tide_m")..hd.len() {
                if let (Ok(x), Ok(y)) = (a[c].parse::<f64>(), b[c].parse::<f64>()) {
                    worst[c] = worst[c].max((x - y).abs());
                }
            }
            let w = col(&hd, "within_order");
            if a[w] != b[w] {
                verdicts += 1;
                let (u, al) = (col(&hd, "u95_tvu_m"), col(&hd, "allowed_u95_tvu_m"));
                assert!(a[u] != b[u] || a[al] != b[al], "{name}: {a:?} {b:?}");
            }
        }
        for (c, w) in worst.iter().enumerate() {
            if *w > 0.0 {
                eprintln!("{name}: per-zone file, worst {} difference {w:.4}", hd[c]);
            }
            let bound = match hd[c].as_str() {
                "tide_m" | "reduced_depth_m" => 0.001,
                "u95_tvu_m" | "allowed_u95_tvu_m" => 0.001,
                _ => 0.0005,
            };
            assert!(*w <= bound, "{name}: {} {w}", hd[c]);
        }
        eprintln!("{name}: per-zone file, {verdicts} within_order verdicts differ");
    }
    // The QA report from the per-sounding file is the reduction's, field for field.
    let qa = |dir: &str| -> serde_json::Value {
        serde_json::from_slice(&std::fs::read(p(&format!("{dir}/qa-report.json"))).unwrap())
            .unwrap()
    };
    // Apart from the model each names: the reduction's zoning, the apply run's correction file.
    let (mut direct, mut sound) = (qa("direct"), qa("sound"));
    assert_eq!(direct["tide_model"], "zoning");
    assert_eq!(sound["tide_model"], "correction_file");
    direct.as_object_mut().unwrap().remove("tide_model");
    sound.as_object_mut().unwrap().remove("tide_model");
    // And the inputs each lists: the apply run's are the reduction's and the correction file.
    let pd = direct
        .as_object_mut()
        .unwrap()
        .remove("provenance")
        .unwrap();
    let ps = sound.as_object_mut().unwrap().remove("provenance").unwrap();
    let roles = |p: &serde_json::Value| -> Vec<String> {
        p["inputs"]
            .as_array()
            .unwrap()
            .iter()
            .map(|i| {
                format!(
                    "{} {}",
                    i["role"].as_str().unwrap(),
                    i["sha256"].as_str().unwrap()
                )
            })
            .collect()
    };
    let (rd, rs) = (roles(&pd), roles(&ps));
    assert_eq!(rs.len(), rd.len() + 1);
    assert_eq!(rs[..rd.len()], rd[..]);
    assert!(rs[rd.len()].starts_with("correction file "), "{rs:?}");
    assert_eq!(direct, sound);
    assert!(p("sound/qa-report.html").exists());
    // From the per-zone file the survey's counts agree within the verdicts that differ.
    let (a, b) = (qa("direct"), qa("zones"));
    assert_eq!(a["survey"]["soundings"], b["survey"]["soundings"]);
    assert_eq!(a["achieved_order"], b["achieved_order"]);
}

#[test]
fn a_file_without_uncertainty_components_gives_no_uncertainty_or_is_refused_when_asked() {
    let d = tempfile::tempdir().unwrap();
    let p = |x: &str| d.path().join(x);
    let o = ebbwise(&["correctors", &demo(), "--out", &s(&p("c"))]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // The earlier layout: the same file without the five component columns.
    let (h, rows) = read_csv(&p("c/correctors-zones.csv"));
    let keep = col(&h, "status") + 1;
    let old = p("old/correctors-zones.csv");
    write_csv(
        &old,
        &h[..keep],
        &rows.iter().map(|r| r[..keep].to_vec()).collect::<Vec<_>>(),
    );
    let err = apply(&old, &p("out"), &[]);
    assert!(err.contains("have no u_tide_m or not all five"), "{err}");
    let (ha, _) = read_csv(&p("out/launch-a.applied.csv"));
    assert!(!ha.contains(&"u_tvu_m".to_string()), "{ha:?}");
    assert!(!p("out/qa-report.json").exists());
    // Read back, the tide is the same as from the full file.
    let _ = apply(
        &p("c/correctors-zones.csv"),
        &p("full"),
        &["--no-uncertainty"],
    );
    let tide = |dir: &str| {
        let (h, r) = read_csv(&p(&format!("{dir}/launch-a.applied.csv")));
        let c = col(&h, "tide_m");
        r.into_iter().map(|x| x[c].clone()).collect::<Vec<_>>()
    };
    assert_eq!(tide("out"), tide("full"));
    let (hf, _) = read_csv(&p("full/launch-a.applied.csv"));
    assert!(!hf.contains(&"u_tvu_m".to_string()), "--no-uncertainty");
    // Asked for (--order), uncertainty the file does not carry is refused.
    let o = ebbwise(&[
        "apply",
        &s(&old),
        "--project",
        &demo(),
        "--out",
        &s(&p("asked")),
        "--order",
        "1a",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("uncertainty cannot be carried"),
        "{}",
        stderr(&o)
    );
}

/// A copy of the demo's inputs with its gap-filled project in `dir/zoning-demo`, the project's
/// `[gap_fill]` lines amended by `edit`. Returns the project's path.
fn gap_fill_copy(dir: &Path, edit: impl Fn(String) -> String) -> String {
    let from = repo().join("zoning-demo");
    let to = dir.join("zoning-demo");
    for sub in ["gauges", "soundings"] {
        std::fs::create_dir_all(to.join(sub)).unwrap();
        for e in std::fs::read_dir(from.join(sub)).unwrap() {
            let e = e.unwrap();
            std::fs::copy(e.path(), to.join(sub).join(e.file_name())).unwrap();
        }
    }
    std::fs::copy(from.join("zoning.geojson"), to.join("zoning.geojson")).unwrap();
    let text = std::fs::read_to_string(from.join("gap-fill.toml")).unwrap();
    let edited = edit(text.clone());
    assert_ne!(edited, text, "the edit changes the project");
    std::fs::write(to.join("gap-fill.toml"), edited).unwrap();
    s(&to.join("gap-fill.toml"))
}

/// Reduces `project` into `dir/direct`, writes its per-zone, per-line and per-sounding
/// correction files into `dir/c` and applies each: the per-zone and per-line files to every
/// soundings file (`dir/zones`, `dir/lines`), each per-sounding file to its own soundings file
/// (`dir/sound`). Every apply runs with the sidecar, so provenance is checked.
fn reduce_and_apply_every_file(project: &str, dir: &Path) {
    let p = |x: &str| s(&dir.join(x));
    let o = ebbwise(&["reduce", project, "--out", &p("direct"), "--no-progress"]);
    assert!(o.status.code() == Some(1), "{}", stderr(&o));
    let o = ebbwise(&[
        "correctors",
        project,
        "--out",
        &p("c"),
        "--per-sounding",
        "--per-line",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    for (file, out) in [
        ("c/correctors-zones.csv", "zones"),
        ("c/correctors-lines.csv", "lines"),
    ] {
        let o = ebbwise(&["apply", &p(file), "--project", project, "--out", &p(out)]);
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        assert!(!stderr(&o).contains("warning:"), "{}", stderr(&o));
    }
    let soundings = Path::new(project).parent().unwrap().join("soundings");
    for (stem, input) in [("launch-a", "launch-a.csv"), ("launch-b", "launch-b.txt")] {
        let o = ebbwise(&[
            "apply",
            &p(&format!("c/{stem}.correctors.csv")),
            &s(&soundings.join(input)),
            "--project",
            project,
            "--out",
            &p("sound"),
        ]);
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    }
}

/// What comparing an applied file with the reduced one found.
#[derive(Default, Debug)]
struct Agreement {
    /// Rows `gap_filled` in both.
    gap_filled: usize,
    /// Per column: the largest difference over rows with a tide, metres.
    worst: std::collections::BTreeMap<String, f64>,
}

/// Compares `dir/<kind>/<name>.applied.csv` with `dir/direct/<name>.reduced.csv`: the same
/// columns; the same status on every row; on every `reduced` and `gap_filled` row the same
/// `status_detail` (the words of the gap filling, carried by the correction file) and, when
/// `exact`, every column equal. Rows for which `skip_numbers` is true are not counted in `worst`.
fn compare_applied(
    dir: &Path,
    kind: &str,
    name: &str,
    exact: bool,
    skip_numbers: &dyn Fn(&[String], &[String]) -> bool,
) -> Agreement {
    let (hd, direct) = read_csv(&dir.join(format!("direct/{name}.reduced.csv")));
    let (ha, applied) = read_csv(&dir.join(format!("{kind}/{name}.applied.csv")));
    assert_eq!(hd, ha, "{kind} {name}: same columns");
    assert_eq!(direct.len(), applied.len());
    let (st, det, tide) = (
        col(&hd, "status"),
        col(&hd, "status_detail"),
        col(&hd, "tide_m"),
    );
    let mut out = Agreement::default();
    for (a, b) in direct.iter().zip(&applied) {
        assert_eq!(a[st], b[st], "{kind} {name}: status of {a:?}");
        if a[st] != "reduced" && a[st] != "gap_filled" {
            continue;
        }
        assert_eq!(a[det], b[det], "{kind} {name}: detail of {a:?}");
        out.gap_filled += usize::from(a[st] == "gap_filled");
        if exact {
            assert_eq!(a, b, "{kind} {name}: every column");
        }
        if skip_numbers(&hd, a) {
            continue;
        }
        for c in tide..hd.len() {
            if let (Ok(x), Ok(y)) = (a[c].parse::<f64>(), b[c].parse::<f64>()) {
                let w = out.worst.entry(hd[c].clone()).or_default();
                *w = w.max((x - y).abs());
            }
        }
    }
    out
}

/// The gap-filled demo (`zoning-demo/gap-fill.toml`: pendrath's gap filled from orlick,
/// skellan's set-aside samples from its prediction and from pendrath) through every correction
/// file. From the per-sounding files every column of every row equals `ebbwise reduce`'s. From the per-zone and per-line files (1-min step) the statuses and the details
/// of every reduced and gap-filled row are equal, and the numbers agree within the bounds of
/// docs/correctors.md: the tide within 1 mm (linear interpolation between grid times on which
/// the demo's samples fall, plus 0.1-mm rounding), the uncertainties within 0.5 mm, but for the
/// gauge component of gap-filled rows, within 1 mm (the filled levels' uncertainty and the
/// interpolation error of the filled record vary within a step; measured worst 0.9 mm), and
/// U95 within 1 mm. The count of `gap_filled` soundings is the reduction's.
#[test]
fn gap_filled_soundings_through_every_correction_file_equal_reduce() {
    let d = tempfile::tempdir().unwrap();
    let project = s(&repo().join("zoning-demo/gap-fill.toml"));
    reduce_and_apply_every_file(&project, d.path());
    // The per-zone file marks the filled zone-times, with their method.
    let (h, rows) = read_csv(&d.path().join("c/correctors-zones.csv"));
    let (st, det) = (col(&h, "status"), col(&h, "status_detail"));
    let filled: Vec<_> = rows.iter().filter(|r| r[st] == "gap_filled").collect();
    assert!(!filled.is_empty());
    assert!(filled.iter().all(|r| r[det].contains("level filled by")));
    assert!(rows
        .iter()
        .all(|r| (r[st] == "gap_filled") != r[det].is_empty()));
    eprintln!("per-zone file: {} gap_filled zone-times", filled.len());
    // Its sidecar records the [gap_fill] settings among the inputs that change a tide.
    let side: serde_json::Value = serde_json::from_slice(
        &std::fs::read(d.path().join("c/correctors-zones.csv.json")).unwrap(),
    )
    .unwrap();
    let gf = &side["project_inputs"]["tide"]["gap_fill"];
    assert_eq!(gf["enabled"], true, "{gf}");
    assert_eq!(gf["renormalise_feeds"], true, "{gf}");
    let mut total = [0usize; 3];
    for name in ["launch-a", "launch-b"] {
        let none = |_: &[String], _: &[String]| false;
        let sound = compare_applied(d.path(), "sound", name, true, &none);
        for (k, kind) in ["zones", "lines"].iter().enumerate() {
            let a = compare_applied(d.path(), kind, name, false, &none);
            assert_eq!(a.gap_filled, sound.gap_filled, "{kind} {name}");
            for (c, w) in &a.worst {
                let bound = match c.as_str() {
                    "tide_m" | "reduced_depth_m" | "u95_tvu_m" | "allowed_u95_tvu_m" => 0.001,
                    "u_tide_gauge_m" => 0.001,
                    _ => 0.0005,
                };
                assert!(*w <= bound + 1e-9, "{kind} {name}: {c} differs by {w}");
            }
            eprintln!(
                "{name}: {kind} file, {} gap_filled, worst differences {:?}",
                a.gap_filled, a.worst
            );
            total[k + 1] += a.gap_filled;
        }
        total[0] += sound.gap_filled;
    }
    eprintln!("gap_filled through apply (per sounding, per zone, per line): {total:?}");
    // All 15 222 soundings behind the demo's gaps (docs/gap-filling.md, tests/it/demo_recovery.rs).
    assert_eq!(total, [15_222; 3]);
}

/// Minutes since 1970 of a time in a reduced file's first column: ISO 8601 (launch A) or Unix
/// seconds (launch B), floored.
fn minute_of(t: &str) -> i64 {
    let s = match t.parse::<f64>() {
        Ok(x) => x,
        Err(_) => {
            chrono::DateTime::parse_from_rfc3339(t)
                .unwrap()
                .timestamp_millis() as f64
                / 1e3
        }
    };
    (s / 60.0).floor() as i64
}

/// Renormalised feeds through every correction file: the gap-filled demo with pendrath's gap
/// left open (`methods = { pendrath = "none" }`), so that zone VW3 (orlick and pendrath) takes
/// its tide from orlick alone across the gap, `gap_filled` with a detail naming the feed left
/// out, and VW5 (pendrath alone) has none (`no_gauge_data`). From the per-sounding files every
/// column of every reduced and renormalised row equals `ebbwise reduce`'s; from the per-zone and
/// per-line files every status and every such row's detail. The per-zone file's numbers agree
/// within the bounds of the filled demo, but in the two steps at the edges of the renormalised
/// stretch: there the direct tide jumps from the full blend to orlick's alone between two grid
/// times, which linear interpolation between those rows cannot follow (the tide's difference is
/// printed, not bounded), and the uncertainties carried are the larger of the two rows' (checked
/// to be no smaller than the direct ones). The per-line file's differences are printed.
#[test]
fn renormalised_feeds_through_every_correction_file_equal_reduce() {
    let d = tempfile::tempdir().unwrap();
    let project = gap_fill_copy(d.path(), |t| {
        t.replace(
            "# methods = { skellan = \"prediction_residual\" }",
            "methods = { pendrath = \"none\" }",
        )
    });
    reduce_and_apply_every_file(&project, d.path());
    let (h, rows) = read_csv(&d.path().join("c/correctors-zones.csv"));
    let (zc, tc, st, det) = (
        col(&h, "zone"),
        col(&h, "time_utc"),
        col(&h, "status"),
        col(&h, "status_detail"),
    );
    // VW3's renormalised zone-times, by minute.
    let renorm: std::collections::HashMap<i64, bool> = rows
        .iter()
        .filter(|r| r[zc] == "VW3")
        .map(|r| {
            (
                minute_of(&r[tc]),
                r[det].starts_with("feed 'pendrath' has no level"),
            )
        })
        .collect();
    let n_renorm = renorm.values().filter(|x| **x).count();
    // The gap runs from 13:10 to 14:00 at pendrath; VW3's rows strictly inside it are filled.
    assert!(n_renorm >= 45, "{n_renorm}");
    assert!(rows
        .iter()
        .filter(|r| r[zc] == "VW3" && r[st] == "gap_filled")
        .all(|r| r[det]
            == "feed 'pendrath' has no level: tide from orlick with weights renormalised"));
    let at_edge = |h: &[String], r: &[String]| {
        let m = minute_of(&r[0]);
        r[col(h, "zone")] == "VW3" && renorm.get(&m) != renorm.get(&(m + 1))
    };
    // In the edge steps: the tide is the interpolation across the jump (printed), and each
    // carried uncertainty is the larger of the two rows', so never below the direct one by more
    // than its variation along one step and the 0.1-mm rounding (0.5 mm).
    let mut edges = 0;
    let mut worst_edge = [0.0f64; 2];
    for name in ["launch-a", "launch-b"] {
        let (hd, direct) = read_csv(&d.path().join(format!("direct/{name}.reduced.csv")));
        let (_, zones) = read_csv(&d.path().join(format!("zones/{name}.applied.csv")));
        let f = |r: &[String], c: &str| r[col(&hd, c)].parse::<f64>().unwrap();
        for (a, b) in direct.iter().zip(&zones) {
            if a[col(&hd, "status")] != "gap_filled" || !at_edge(&hd, a) {
                continue;
            }
            edges += 1;
            for c in ["u_tide_m", "u_tide_gauge_m", "u95_tvu_m"] {
                assert!(f(b, c) >= f(a, c) - 0.0005, "{name} {c}: {a:?} {b:?}");
            }
            worst_edge[0] = worst_edge[0].max((f(a, "tide_m") - f(b, "tide_m")).abs());
            worst_edge[1] = worst_edge[1].max(f(b, "u_tide_m") - f(a, "u_tide_m"));
        }
    }
    eprintln!(
        "{edges} soundings in VW3's edge steps: tide differs by up to {:.4} m, u_tide_m larger by up to {:.4} m",
        worst_edge[0], worst_edge[1]
    );
    let none = |_: &[String], _: &[String]| false;
    let mut total = [0usize; 3];
    for name in ["launch-a", "launch-b"] {
        let sound = compare_applied(d.path(), "sound", name, true, &none);
        let zones = compare_applied(d.path(), "zones", name, false, &at_edge);
        let lines = compare_applied(d.path(), "lines", name, false, &none);
        for (c, w) in &zones.worst {
            let bound = match c.as_str() {
                "tide_m" | "reduced_depth_m" | "u95_tvu_m" | "allowed_u95_tvu_m" => 0.001,
                "u_tide_gauge_m" => 0.001,
                _ => 0.0005,
            };
            assert!(*w <= bound + 1e-9, "zones {name}: {c} differs by {w}");
        }
        eprintln!(
            "{name}: per-zone file, worst differences away from the edges {:?}; per-line file {:?}",
            zones.worst, lines.worst
        );
        for (k, n) in [sound.gap_filled, zones.gap_filled, lines.gap_filled]
            .iter()
            .enumerate()
        {
            total[k] += n;
        }
    }
    eprintln!("gap_filled through apply (per sounding, per zone, per line): {total:?}");
    // VW5's soundings there have no tide, from every file; VW3's are all renormalised.
    let summary = |dir: &str| -> serde_json::Value {
        serde_json::from_slice(
            &std::fs::read(d.path().join(format!("{dir}/reduce-summary.json"))).unwrap(),
        )
        .unwrap()
    };
    let direct = summary("direct");
    let zone = |id: &str, what: &str| {
        direct["zones"]
            .as_array()
            .unwrap()
            .iter()
            .find(|z| z["zone"] == id)
            .unwrap()[what]
            .as_u64()
            .unwrap() as usize
    };
    let vw3 = zone("VW3", "gap_filled");
    assert!(vw3 > 4_000, "{vw3}");
    // Skellan's samples are still filled (VW6): every gap_filled sounding of the reduction,
    // renormalised or filled, is gap_filled from every file.
    let all = direct["rows_by_status"]["gap_filled"].as_u64().unwrap() as usize;
    assert_eq!(all, vw3 + zone("VW6", "gap_filled"));
    assert_eq!(total, [all; 3]);
    assert!(edges > 0 && edges < 1_000, "{edges}");
    let vw5 = zone("VW5", "no_gauge_data");
    assert!(vw5 > 4_000, "{vw5}");
}

/// A correction file made under one `[gap_fill]` is refused by `ebbwise apply` once the table
/// changes (the whole table is among the inputs that change a tide, docs/correctors.md "What
/// provenance covers"), each setting named with its recorded and current value; accepted with
/// `--accept-changed-inputs`, the difference is written into the summary.
#[test]
fn a_changed_gap_fill_table_is_refused_by_apply() {
    let d = tempfile::tempdir().unwrap();
    let project = gap_fill_copy(d.path(), |t| {
        t.replace("max_fill_min = 180", "max_fill_min = 150")
    });
    let p = |x: &str| s(&d.path().join(x));
    let o = ebbwise(&["correctors", &project, "--out", &p("c")]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let text = std::fs::read_to_string(&project).unwrap();
    let changed = text
        .replace("max_fill_min = 150", "max_fill_min = 120")
        .replace("renormalise_feeds = true", "renormalise_feeds = false");
    assert_ne!(changed, text);
    std::fs::write(&project, changed).unwrap();
    let args = [
        "apply",
        &p("c/correctors-zones.csv"),
        "--project",
        &project,
        "--out",
        &p("out"),
    ];
    let o = ebbwise(&args);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(err.contains("in 2 input(s) that change a tide"), "{err}");
    assert!(
        err.contains("(tide) gap_fill.max_fill_min: 150.0 in the correction file, 120.0 now"),
        "{err}"
    );
    assert!(
        err.contains("(tide) gap_fill.renormalise_feeds: true in the correction file, false now"),
        "{err}"
    );
    assert!(!d.path().join("out/launch-a.applied.csv").exists());
    let mut accepted = args.to_vec();
    accepted.push("--accept-changed-inputs");
    let o = ebbwise(&accepted);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let items: Vec<String> = summary(&d.path().join("out"))["accepted_input_differences"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x["item"].as_str().unwrap().to_string())
        .collect();
    assert_eq!(
        items,
        ["gap_fill.max_fill_min", "gap_fill.renormalise_feeds"]
    );
}

/// A per-zone file of layout 3 (no `status_detail` column; a value from filled samples was
/// written `interpolated`) still applies on the gap-filled demo, with the same tides, but marks
/// no sounding `gap_filled`: `ebbwise apply` says so in a warning rather than passing over it.
#[test]
fn an_earlier_layout_applied_under_gap_fill_is_warned_about() {
    let d = tempfile::tempdir().unwrap();
    let project = s(&repo().join("zoning-demo/gap-fill.toml"));
    let p = |x: &str| d.path().join(x);
    let o = ebbwise(&["correctors", &project, "--out", &s(&p("c"))]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let (h, rows) = read_csv(&p("c/correctors-zones.csv"));
    let (st, det) = (col(&h, "status"), col(&h, "status_detail"));
    assert_eq!(det, h.len() - 1);
    let old: Vec<Vec<String>> = rows
        .iter()
        .map(|r| {
            let mut r = r[..det].to_vec();
            if r[st] == "gap_filled" {
                r[st] = "interpolated".into();
            }
            r
        })
        .collect();
    let file = p("old/correctors-zones.csv");
    write_csv(&file, &h[..det], &old);
    let run = |f: &Path, out: &str| {
        let o = ebbwise(&["apply", &s(f), "--project", &project, "--out", &s(&p(out))]);
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        stderr(&o)
    };
    let err = run(&file, "old-out");
    assert!(
        err.contains(
            "is of an earlier layout (no status_detail column), which marks no tide gap_filled"
        ),
        "{err}"
    );
    assert!(!run(&p("c/correctors-zones.csv"), "new-out").contains("earlier layout"));
    for name in ["launch-a", "launch-b"] {
        let (ha, a) = read_csv(&p(&format!("old-out/{name}.applied.csv")));
        let (_, b) = read_csv(&p(&format!("new-out/{name}.applied.csv")));
        let (st, tide) = (col(&ha, "status"), col(&ha, "tide_m"));
        let mut filled = 0;
        for (x, y) in a.iter().zip(&b) {
            assert_eq!(x[tide], y[tide], "{name}: the same tide");
            assert_ne!(x[st], "gap_filled");
            if y[st] == "gap_filled" {
                filled += 1;
                assert_eq!(x[st], "reduced");
            }
        }
        assert!(filled > 4_000, "{name}: {filled}");
    }
}

/// A gauge's constants rewritten under the same path (a new `ebbwise analyse`) change the
/// tides filling by prediction gives: `apply` refuses the older correction file, naming the
/// gauge's constants by their SHA-256; a constants file copied elsewhere with the same content
/// changes nothing that makes a tide.
#[test]
fn constants_changed_in_place_are_refused_by_apply() {
    let d = tempfile::tempdir().unwrap();
    let project = gap_fill_copy(d.path(), |t| {
        t.replace("max_fill_min = 180", "max_fill_min = 170")
    });
    let p = |x: &str| s(&d.path().join(x));
    let o = ebbwise(&["correctors", &project, "--out", &p("c")]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let args = [
        "apply",
        &p("c/correctors-zones.csv"),
        "--project",
        &project,
        "--out",
        &p("out"),
    ];
    // Same content under another path: no tide input differs.
    let gauges = d.path().join("zoning-demo/gauges");
    std::fs::copy(
        gauges.join("skellan.constants.toml"),
        gauges.join("skellan-copy.constants.toml"),
    )
    .unwrap();
    let text = std::fs::read_to_string(&project).unwrap();
    std::fs::write(
        &project,
        text.replace(
            "gauges/skellan.constants.toml",
            "gauges/skellan-copy.constants.toml",
        ),
    )
    .unwrap();
    let o = ebbwise(&args);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(!stderr(&o).contains("change a tide"), "{}", stderr(&o));
    // New content under the same path: refused.
    let k = gauges.join("skellan-copy.constants.toml");
    let c = std::fs::read_to_string(&k).unwrap();
    let raised: String = c
        .lines()
        .map(|l| match l.strip_prefix("z0_m = ") {
            Some(v) => format!("z0_m = {:.4}\n", v.parse::<f64>().unwrap() + 0.01),
            None => format!("{l}\n"),
        })
        .collect();
    assert_ne!(raised, c);
    std::fs::write(&k, raised).unwrap();
    let o = ebbwise(&args);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(err.contains("constants_sha256"), "{err}");
}
