//! Every status is reachable, and every row is accounted for, with hand-made input.

use super::{ebbwise, read_csv, stderr, MiniProject};

const SOUNDINGS: &str = "time,lon,lat,depth,line
2026-06-14T01:00:00Z,10.005,50.005,10.0,L1
2026-06-14T01:00:00Z,10.015,50.005,10.0,L1
2026-06-14T01:00:00Z,10.030,50.005,10.0,L1
2026-06-14T02:30:00Z,10.005,50.005,10.0,L2
2026-06-14T05:00:00Z,10.005,50.005,10.0,L2
2026-06-14T01:00:00Z,10.005,50.005,abc,L3
2026-06-14T01:00:00,10.005,50.005,10.0,L3
2026-06-14T01:00:00Z,10.005,50.005,0.5,L3
2026-06-14T01:00:00Z,10.005

2026-06-14T01:00:00Z,10.01,50.005,10.0,L4
";

#[test]
fn each_status_is_reached_with_its_reason() {
    let p = MiniProject::new(SOUNDINGS);
    let out = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(
        out.status.code(),
        Some(1),
        "some soundings not reduced: {}",
        stderr(&out)
    );
    let (header, rows) = read_csv(&p.path("out/s.reduced.csv"));
    assert_eq!(
        header,
        [
            "time",
            "lon",
            "lat",
            "depth",
            "line",
            "zone",
            "tide_m",
            "reduced_depth_m",
            "status",
            "status_detail"
        ]
    );
    // 11 data lines, one blank: 10 rows, in input order.
    assert_eq!(rows.len(), 10);
    let col = |r: usize, c: &str| rows[r][header.iter().position(|h| h == c).unwrap()].clone();
    // Row 1: Z1, Δt 0, R 1, scaled form: tide = gauge level at 01:00 = 2.0 + 0.060 = 2.060 m;
    // reduced 10.0 − 2.06 = 7.94 m.
    assert_eq!(
        (col(0, "zone"), col(0, "tide_m"), col(0, "reduced_depth_m")),
        ("Z1".into(), "2.0600".into(), "7.9400".into())
    );
    assert_eq!(col(0, "status"), "reduced");
    // Row 2: Z2, Δt +6 min → level at 00:54 = 2.054 m; zone-mean form 1.5 + 0.5 (2.054 − 2.1)
    // = 1.477 m; reduced 8.523 m.
    assert_eq!(
        (col(1, "zone"), col(1, "tide_m"), col(1, "reduced_depth_m")),
        ("Z2".into(), "1.4770".into(), "8.5230".into())
    );
    assert_eq!(col(2, "status"), "outside_zoning");
    assert_eq!(col(2, "zone"), "");
    assert_eq!(col(2, "tide_m"), "");
    assert_eq!(col(3, "status"), "no_gauge_data");
    assert_eq!(col(3, "zone"), "Z1");
    assert!(
        col(3, "status_detail").contains("inside a 60.0 min gap starting at 2026-06-14T02:00:00Z"),
        "{}",
        col(3, "status_detail")
    );
    assert_eq!(col(4, "status"), "no_gauge_data");
    assert!(
        col(4, "status_detail").contains("60.0 min after the record ends"),
        "{}",
        col(4, "status_detail")
    );
    assert_eq!(col(5, "status"), "bad_input");
    assert_eq!(
        col(5, "status_detail"),
        "field 'depth': expected a depth in metres, found 'abc'"
    );
    assert_eq!(col(6, "status"), "bad_input");
    assert!(col(6, "status_detail")
        .starts_with("field 'time': time '2026-06-14T01:00:00' has no UTC offset"));
    // Drying height kept negative: 0.5 − 2.06 = −1.56 m.
    assert_eq!(col(7, "reduced_depth_m"), "-1.5600");
    assert_eq!(col(8, "status"), "bad_input");
    assert_eq!(
        col(8, "status_detail"),
        "field 'lat': missing: the row has 2 fields, the header 5"
    );
    // On the shared edge lon 10.01: the first zone in the file.
    assert_eq!(col(9, "zone"), "Z1");
    let err = stderr(&out);
    for (status, n) in [
        ("reduced", 4),
        ("outside_zoning", 1),
        ("no_gauge_data", 2),
        ("bad_input", 3),
    ] {
        let line = err
            .lines()
            .find(|l| l.trim_start().starts_with(status))
            .unwrap_or_else(|| panic!("{err}"));
        assert!(line.trim_end().ends_with(&format!(" {n}")), "{line}");
    }
    assert!(err.contains("1 blank lines skipped"), "{err}");
    assert!(err.contains("qualified hydrographic review"), "{err}");
}

#[test]
fn all_reduced_exits_zero() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    let out = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
}

#[test]
fn unusable_inputs_stop_the_run_with_file_line_and_field() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    p.write(
        "g1.csv",
        "time,height\n2026-06-14T00:00:00Z,1.0\n2026-06-14T00:06:00Z,x\n",
    );
    let out = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(out.status.code(), Some(2));
    let err = stderr(&out);
    assert!(
        err.contains("g1.csv:3: field 'height': expected a number, found 'x'"),
        "{err}"
    );
    assert!(!p.path("out/s.reduced.csv").exists());

    let p =
        MiniProject::new("time;lon;lat;depth;line\n2026-06-14T01:00:00Z;10.005;50.005;10.0;L1\n");
    let out = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(out.status.code(), Some(2));
    let err = stderr(&out);
    assert!(
        err.contains(
            "s.csv:1: the header has 1 column(s) when split by Comma — is the delimiter right?"
        ),
        "{err}"
    );
    assert!(
        !p.path("out/s.reduced.csv").exists(),
        "no half-written output"
    );
    assert!(
        !p.path("out/.s.reduced.csv.ebbwise-partial").exists(),
        "temporary removed"
    );
}

#[test]
fn a_gauge_record_in_feet_without_saying_so_is_caught() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    // Readings of about 1.1 m written in feet (÷ 0.3048 ≈ 3.6): the record's median level above
    // chart datum comes out near 4.6 m against the stated 2.1 m; read as feet it is 2.1 m.
    let mut g = String::from("time,height\n");
    for m in (0..=240).step_by(6) {
        g.push_str(&format!(
            "2026-06-14T{:02}:{:02}:00Z,{:.3}\n",
            m / 60,
            m % 60,
            (1.0 + 0.001 * m as f64) / 0.3048
        ));
    }
    p.write("g1.csv", &g);
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(
        err.contains("g1.csv: field 'height': the record's median level is 4.6"),
        "{err}"
    );
    assert!(err.contains("read as feet it would be 2.1"), "{err}");
    assert!(err.contains("set units = \"ft\""), "{err}");
}

#[test]
fn swapped_longitude_and_latitude_are_named() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,50.005,10.005,10.0,L1\n");
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(o.status.code(), Some(1));
    let (h, rows) = read_csv(&p.path("out/s.reduced.csv"));
    let d = &rows[0][h.iter().position(|c| c == "status_detail").unwrap()];
    assert_eq!(d, "position is outside every zone (with x and y swapped it would be in zone 'Z1': check the column mapping, x = longitude or easting, y = latitude or northing)");
}

/// A file that cannot be opened is named once with the operating system's words once: the
/// project file itself, a soundings file the project names, and the record `analyse` is given.
#[test]
fn a_missing_file_is_reported_once() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    let missing_project = p.path("nothere.toml").to_string_lossy().into_owned();
    std::fs::remove_file(p.path("s.csv")).unwrap();
    let missing_record = p.path("nothere.csv").to_string_lossy().into_owned();
    for (args, file) in [
        (vec!["reduce", missing_project.as_str()], "nothere.toml"),
        (vec!["reduce", &p.project(), "--no-progress"], "s.csv"),
        (vec!["analyse", missing_record.as_str()], "nothere.csv"),
    ] {
        let o = ebbwise(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}");
        let err = stderr(&o);
        let line = err
            .lines()
            .find(|l| l.starts_with("ebbwise: "))
            .unwrap_or_else(|| panic!("{args:?}: {err}"));
        // The OS error of a missing file (ENOENT) is "No such file or directory (os error 2)" on
        // Linux and macOS; whatever the words, they end in "(os error N)" once.
        assert!(line.contains(&format!("{file}: ")), "{line}");
        assert_eq!(line.matches("(os error").count(), 1, "{line}");
    }
}

/// Paths are printed as the project file's folder joined with what the file says, without a
/// doubled `./`: run from the project's folder on `project.toml`, a record written
/// `./missing.csv` is reported as `./missing.csv`.
#[test]
fn paths_are_printed_as_written() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    let text = std::fs::read_to_string(p.path("project.toml")).unwrap();
    p.write(
        "project.toml",
        &text.replace("record = \"g1.csv\"", "record = \"./missing.csv\""),
    );
    for project in ["project.toml", "./project.toml"] {
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_ebbwise"))
            .args(["check", project])
            .current_dir(p.dir.path())
            .output()
            .unwrap();
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(1), "{err}");
        assert!(err.contains("error: ./missing.csv: "), "{project}: {err}");
        assert!(!err.contains("././"), "{project}: {err}");
    }
}

/// A misspelt survey order is named with the nearest one (`specal` is one letter short of
/// `special`), in the project file and with `--order`; two equally near orders (`1c`: `1a`
/// and `1b`) are no hint, so the valid ones are listed.
#[test]
fn a_misspelt_order_suggests_the_nearest() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    let text = std::fs::read_to_string(p.path("project.toml")).unwrap();
    p.write(
        "project.toml",
        &format!("{text}[uncertainty]\norder = \"specal\"\n"),
    );
    let o = ebbwise(&["check", &p.project()]);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        stderr(&o).contains(
            "project.toml: field 'uncertainty.order': unknown survey order 'specal': did you mean 'special'?"
        ),
        "{}",
        stderr(&o)
    );
    let o = ebbwise(&["reduce", &p.project(), "--no-progress", "--order", "1c"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains(
            "error: --order: unknown survey order '1c' (expected one of: exclusive, special, 1a, 1b, 2)"
        ),
        "{}",
        stderr(&o)
    );
}
