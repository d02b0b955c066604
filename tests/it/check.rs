//! `ebbwise check` reports each problem with file, line and field, and fails only on errors.

use super::{ebbwise, ebbwise_in, stderr, MiniProject, MINI_PROJECT, MINI_ZONING};

const GOOD: &str = "time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n2026-06-14T01:10:00Z,10.015,50.005,10.0,L1\n";

fn check(p: &MiniProject) -> (Option<i32>, String) {
    let out = ebbwise(&["check", &p.project()]);
    (out.status.code(), stderr(&out))
}

#[test]
fn a_clean_project_passes() {
    let p = MiniProject::new(GOOD);
    let (code, err) = check(&p);
    assert_eq!(code, Some(0), "{err}");
    assert!(err.contains("0 error(s)"), "{err}");
    assert!(
        err.contains("2 sounding rows read, 2026-06-14T01:00:00Z to 2026-06-14T01:10:00Z"),
        "{err}"
    );
}

#[test]
fn unknown_gauge_and_bad_weights() {
    let p = MiniProject::new(GOOD);
    p.write("zoning.geojson", &MINI_ZONING.replace(
        r#""gauge":"g1","time_corrector_min":6,"range_ratio":0.5"#,
        r#""feeds":[{"gauge":"g1","weight":0.6,"time_corrector_min":6,"range_ratio":0.5},{"gauge":"g9","weight":0.3,"time_corrector_min":0,"range_ratio":1}]"#,
    ));
    let (code, err) = check(&p);
    assert_eq!(code, Some(1), "{err}");
    assert!(err.contains("zoning.geojson: field 'features[1].properties': zone 'Z2' names gauge 'g9', which the project does not define: did you mean 'g1'?"), "{err}");
    // 0.6 + 0.3 is 0.8999999999999999 in binary floating point; the sum is printed to the
    // 1e-6 tolerance of the check.
    assert!(
        err.contains("zoning.geojson: field 'features[1].properties.feeds': zone 'Z2': gauge weights sum to 0.900000, not 1"),
        "{err}"
    );
}

#[test]
fn overlapping_zones_give_the_pair_and_area() {
    let p = MiniProject::new(GOOD);
    // Z2 moved 0.001° west: a 0.001° × 0.01° strip at 50° N overlaps Z1.
    p.write(
        "zoning.geojson",
        &MINI_ZONING.replace(
            "[[[10.01,50.0],[10.02,50.0],[10.02,50.01],[10.01,50.01],[10.01,50.0]]]",
            "[[[10.009,50.0],[10.02,50.0],[10.02,50.01],[10.009,50.01],[10.009,50.0]]]",
        ),
    );
    let (code, err) = check(&p);
    assert_eq!(code, Some(1), "{err}");
    let line = err
        .lines()
        .find(|l| l.contains("overlap by"))
        .unwrap_or_else(|| panic!("{err}"));
    // Geodesic area of the strip: 0.001° of longitude at 50.005° N ≈ 71.6 m (111 320 m ×
    // cos 50.005° × 0.001, spherical approximation, common practice) times 0.01° of latitude
    // ≈ 1 112 m: ≈ 79 600 m². Accept ±1 %.
    let area: f64 = line
        .split("overlap by ")
        .nth(1)
        .unwrap()
        .split(' ')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    assert!((area - 79_600.0).abs() < 800.0, "{line}");
    assert!(line.contains("zones 'Z1' and 'Z2'"), "{line}");
}

#[test]
fn uncovered_soundings_and_gauge_span_and_gaps() {
    let p = MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n2026-06-14T02:30:00Z,10.03,50.02,10.0,L1\n2026-06-14T04:30:00Z,10.005,50.015,10.0,L1\n");
    let (code, err) = check(&p);
    assert_eq!(code, Some(1), "{err}");
    assert!(
        err.contains("s.csv:3: 2 sounding(s) lie outside every zone (first on this line)"),
        "{err}"
    );
    assert!(
        err.contains("m² of the soundings' extent (convex hull) is covered by no zone"),
        "{err}"
    );
    assert!(err.contains("g1.csv: the record ends at 2026-06-14T04:00:00Z, but the soundings need gauge 'g1' until 2026-06-14T04:30:00Z"), "{err}");
    assert!(
        err.contains("g1.csv:23: gap of 60 min from 2026-06-14T02:00:00Z to 2026-06-14T03:00:00Z"),
        "{err}"
    );
}

#[test]
fn gauge_times_out_of_order_and_nan_heights() {
    let p = MiniProject::new(GOOD);
    p.write("g1.csv", "time,height\n2026-06-14T00:00:00Z,1.0\n2026-06-14T00:06:00Z,1.1\n2026-06-14T00:06:00Z,1.1\n2026-06-14T00:03:00Z,1.1\n");
    let (code, err) = check(&p);
    assert_eq!(code, Some(1));
    assert!(
        err.contains("g1.csv:4: field 'time': time '2026-06-14T00:06:00Z' and its reading repeat line 3: quality control sets the sample aside"),
        "{err}"
    );
    // The kept sample before line 5 is line 3 (line 4 is the repeat set aside).
    assert!(err.contains("g1.csv:5: field 'time': time '2026-06-14T00:03:00Z' is earlier than that of line 3 ('2026-06-14T00:06:00Z') before it"), "{err}");
    // A NaN reading is named and set aside; the check does not stop at it.
    p.write(
        "g1.csv",
        "time,height\n2026-06-14T00:00:00Z,1.0\n2026-06-14T00:06:00Z,NaN\n2026-06-14T00:12:00Z,1.2\n",
    );
    let (_, err) = check(&p);
    assert!(
        err.contains("g1.csv:3: field 'height': reading 'NaN' is not a finite number: quality control sets the sample aside"),
        "{err}"
    );
    assert!(
        err.contains("quality control set aside 1 of 3 samples (1 out_of_band)"),
        "{err}"
    );
}

/// A project run as `./project.toml` whose record lies in a sibling folder (`../shared/g1.csv`):
/// messages name the record as written, without a `./` before the `..`.
#[test]
fn a_path_out_of_the_project_folder_is_printed_as_written() {
    let p = MiniProject::new(GOOD);
    let day = p.path("day");
    let shared = p.path("shared");
    std::fs::create_dir_all(&day).unwrap();
    std::fs::create_dir_all(&shared).unwrap();
    let record = std::fs::read_to_string(p.path("g1.csv")).unwrap();
    // A NaN reading at 00:12 (line 4), so that a warning names the record.
    let record = record.replace("2026-06-14T00:12:00Z,1.012", "2026-06-14T00:12:00Z,NaN");
    std::fs::write(shared.join("g1.csv"), record).unwrap();
    for f in ["zoning.geojson", "s.csv"] {
        std::fs::copy(p.path(f), day.join(f)).unwrap();
    }
    std::fs::write(
        day.join("project.toml"),
        MINI_PROJECT.replace("record = \"g1.csv\"", "record = \"./../shared/g1.csv\""),
    )
    .unwrap();
    let o = ebbwise_in(&day, &["check", "./project.toml"]);
    let err = stderr(&o);
    assert!(
        err.contains(
            "warning: ../shared/g1.csv:4: field 'height': reading 'NaN' is not a finite number"
        ),
        "{err}"
    );
    assert!(!err.contains("./../"), "{err}");
}

#[test]
fn unknown_epsg_and_bad_rows() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,deep,L1\n");
    p.write(
        "project.toml",
        &MINI_PROJECT.replace("EPSG:4326", "EPSG:4327777"),
    );
    let (code, err) = check(&p);
    assert_eq!(code, Some(1));
    assert!(
        err.contains("project.toml: field 'soundings[0].crs': unknown CRS 'EPSG:4327777'"),
        "{err}"
    );
    p.write("project.toml", MINI_PROJECT);
    let (_, err) = check(&p);
    assert!(
        err.contains("s.csv:2: field 'depth': expected a depth in metres, found 'deep'"),
        "{err}"
    );
}

/// `check --json` gives each finding's position in parts as well as printed: a height that is
/// not a number on line 3 of the gauge record, and a zone ring that is not closed (no line).
#[test]
fn json_findings_carry_file_line_and_field() {
    let p = MiniProject::new(GOOD);
    p.write(
        "g1.csv",
        "time,height\n2026-06-14T00:00:00Z,1.0\n2026-06-14T00:06:00Z,x\n",
    );
    p.write(
        "zoning.geojson",
        &MINI_ZONING.replace("[10.0,50.01],[10.0,50.0]]]}},", "[10.0,50.01]]]}},"),
    );
    let out = ebbwise(&["check", &p.project(), "--json", "-"]);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let findings = v["findings"].as_array().unwrap();
    let height = findings
        .iter()
        .find(|f| f["field"] == "height")
        .unwrap_or_else(|| panic!("{v:#}"));
    let g1 = p.path("g1.csv").to_string_lossy().into_owned();
    assert_eq!(height["severity"], "error");
    assert_eq!(height["file"], g1.as_str());
    assert_eq!(height["line"], 3);
    assert_eq!(height["at"], format!("{g1}:3: field 'height'").as_str());
    assert_eq!(height["message"], "expected a number, found 'x'");
    let ring = findings
        .iter()
        .find(|f| f["field"] == "features[0].geometry")
        .unwrap_or_else(|| panic!("{v:#}"));
    assert!(ring["line"].is_null(), "{ring}");
    assert_eq!(
        ring["file"],
        p.path("zoning.geojson").to_string_lossy().as_ref()
    );
}

/// The soundings `day.csv` and `day.reduced.csv` reduced into their own folder: `day.csv`'s
/// output would be written over `day.reduced.csv`. `check` names both; `reduce`, `correctors
/// --per-sounding` and `apply` refuse before any output is opened, so no output appears at all
/// (not even `day.reduced.reduced.csv`, which would not clash) and the input is unchanged.
#[test]
fn an_output_over_an_input_is_refused_before_anything_is_written() {
    let p = MiniProject::new(GOOD);
    p.write(
        "project.toml",
        &MINI_PROJECT
            .replace("dir = \"out\"", "dir = \".\"")
            .replace(
                "files = [\"s.csv\"]",
                "files = [\"day.csv\", \"day.reduced.csv\"]",
            ),
    );
    p.write("day.csv", GOOD);
    p.write("day.reduced.csv", GOOD);
    let day = p.path("day.csv").to_string_lossy().into_owned();
    let (code, err) = check(&p);
    assert_eq!(code, Some(1), "{err}");
    let want = format!(
        "error: {}: the soundings file would be overwritten by the reduced file of {day}",
        p.path("day.reduced.csv").display()
    );
    assert!(err.contains(&want), "{err}");
    let listing = || {
        let mut names: Vec<String> = std::fs::read_dir(p.dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    };
    let before = listing();
    for _ in 0..5 {
        let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
        assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
        assert!(stderr(&o).contains(&want), "{}", stderr(&o));
        assert_eq!(listing(), before);
        assert_eq!(
            std::fs::read_to_string(p.path("day.reduced.csv")).unwrap(),
            GOOD
        );
    }
    // The per-sounding correction files: `day.correctors.csv` would be written over an input
    // of that name.
    p.write(
        "project.toml",
        &MINI_PROJECT
            .replace("dir = \"out\"", "dir = \".\"")
            .replace(
                "files = [\"s.csv\"]",
                "files = [\"day.csv\", \"day.correctors.csv\"]",
            ),
    );
    p.write("day.correctors.csv", GOOD);
    let before = listing();
    let o = ebbwise(&["correctors", &p.project(), "--per-sounding"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains(
            "the soundings file would be overwritten by the per-sounding correction file of"
        ),
        "{}",
        stderr(&o)
    );
    assert_eq!(listing(), before);
    // `apply` never writes over the correction file it reads.
    let corr_dir = p.path("corr").to_string_lossy().into_owned();
    let o = ebbwise(&["correctors", &p.project(), "--out", &corr_dir]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let corr = p.path("corr/correctors-zones.csv");
    std::fs::rename(&corr, p.path("day.applied.csv")).unwrap();
    let applied = std::fs::read(p.path("day.applied.csv")).unwrap();
    let o = ebbwise(&[
        "apply",
        &p.path("day.applied.csv").to_string_lossy(),
        &day,
        "--project",
        &p.project(),
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("the correction file would be overwritten by the applied file of"),
        "{}",
        stderr(&o)
    );
    assert_eq!(std::fs::read(p.path("day.applied.csv")).unwrap(), applied);
    assert!(!p.path("apply-summary.json").exists());
}

/// One bad value in each of two zones and a bad project does not hide the others: `check` lists
/// every one, with its feature and field, and the JSON findings carry them all.
#[test]
fn check_lists_every_zoning_problem_and_what_it_could_not_check() {
    let p = MiniProject::new(GOOD);
    p.write(
        "zoning.geojson",
        &MINI_ZONING
            .replace(
                "\"range_ratio\":1.0",
                "\"range_ratio\":1.0,\"u_time_corrector_min\":-1,\"weight\":2",
            )
            .replace(
                "\"range_ratio\":0.5",
                "\"range_ratio\":50,\"u_time_corrector_min\":600",
            ),
    );
    let out = ebbwise(&["check", &p.project(), "--json", "-"]);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let errors: Vec<(String, String)> = v["findings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["severity"] == "error")
        .map(|f| {
            (
                f["field"].as_str().unwrap_or("").to_string(),
                f["message"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    assert_eq!(
        errors,
        vec![
            (
                "features[0].properties.u_time_corrector_min".to_string(),
                "zone 'Z1': a standard uncertainty cannot be negative, found -1".to_string()
            ),
            (
                "features[1].properties.range_ratio".to_string(),
                "zone 'Z2': range ratio 50 is outside the plausible band 0.2 to 5".to_string()
            ),
            (
                "features[1].properties.u_time_corrector_min".to_string(),
                "zone 'Z2': standard uncertainty 600 min is beyond the plausible 60 min (seconds instead of minutes?)".to_string()
            ),
        ]
    );
    // The soundings were still read, and check says what it left out.
    assert_eq!(v["sounding_rows"], 2);
    let err = stderr(&out);
    assert!(
        err.contains("feature(s) 0, 1 take no part in the overlap check"),
        "{err}"
    );
    assert!(
        err.contains(
            "not checked because of the errors above: whether the soundings lie inside the zoning"
        ),
        "{err}"
    );
}

/// A gauge record that cannot be read stops the load, but not the soundings pass: with a zoning
/// that has no error of its own, the soundings are still located (one of the two lies outside
/// every zone), and only the gauge spans are named as not checked.
#[test]
fn a_bad_gauge_record_does_not_hide_the_soundings_outside_the_zoning() {
    let p = MiniProject::new(
        "time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n2026-06-14T01:10:00Z,10.5,50.005,10.0,L1\n",
    );
    p.write(
        "g1.csv",
        "time,height\n2026-06-14T00:00:00Z,1.0\n2026-06-14T00:06:00Z,x\n",
    );
    let (code, err) = check(&p);
    assert_eq!(code, Some(1), "{err}");
    assert!(
        err.contains("g1.csv:3: field 'height': expected a number, found 'x'"),
        "{err}"
    );
    assert!(
        err.contains("s.csv:3: 1 sounding(s) lie outside every zone (first on this line)"),
        "{err}"
    );
    assert!(
        err.contains("not checked because of the errors above: whether the gauge records span the survey and have gaps inside it"),
        "{err}"
    );
    assert!(
        !err.contains("whether the soundings lie inside the zoning"),
        "{err}"
    );
}

/// An hourly record: `check` says quality control is not built for its step (common practice:
/// spike and rate tests on hourly samples see the tide's own curvature), and a 6-min record gets
/// no such warning.
#[test]
fn quality_control_on_a_sparse_record_is_named() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    let err = stderr(&ebbwise(&["check", &p.project()]));
    assert!(!err.contains("quality control is built for"), "{err}");
    let mut g = String::from("time,height\n");
    for h in 0..=4 {
        g.push_str(&format!(
            "2026-06-14T{h:02}:00:00Z,{:.3}\n",
            1.0 + 0.06 * h as f64
        ));
    }
    p.write("g1.csv", &g);
    let project = std::fs::read_to_string(p.path("project.toml"))
        .unwrap()
        .replace("max_gap_min = 30", "max_gap_min = 150");
    p.write("project.toml", &project);
    let err = stderr(&ebbwise(&["check", &p.project()]));
    assert!(
        err.contains("gauge 'g1': quality control is built for records of 1 to 15 min; at this record's 60-min step"),
        "{err}"
    );
}
