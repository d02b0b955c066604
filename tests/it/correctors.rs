//! Tide-correction files: round trip through `correctors` and `apply`, provenance hashes,
//! missing spans.

use super::{ebbwise, read_csv, repo, stderr, MiniProject};

fn demo() -> String {
    repo()
        .join("zoning-demo/project.toml")
        .to_string_lossy()
        .into_owned()
}

fn column(path: &std::path::Path, name: &str) -> Vec<String> {
    let (h, rows) = read_csv(path);
    let c = h
        .iter()
        .position(|x| x == name)
        .unwrap_or_else(|| panic!("no column {name}"));
    rows.into_iter().map(|r| r[c].clone()).collect()
}

#[test]
fn round_trip_through_correction_files() {
    let d = tempfile::tempdir().unwrap();
    let p = |s: &str| d.path().join(s).to_string_lossy().into_owned();
    let o = ebbwise(&[
        "reduce",
        &demo(),
        "--out",
        &p("direct"),
        "--no-progress",
        "--no-uncertainty",
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let o = ebbwise(&["correctors", &demo(), "--out", &p("corr"), "--per-sounding"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let o = ebbwise(&[
        "apply",
        &p("corr/correctors-zones.csv"),
        "--project",
        &demo(),
        "--out",
        &p("zones"),
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    for (name, _) in [("launch-a", 0), ("launch-b", 1)] {
        let direct = d.path().join(format!("direct/{name}.reduced.csv"));
        let via = d.path().join(format!("zones/{name}.applied.csv"));
        assert_eq!(
            column(&direct, "status"),
            column(&via, "status"),
            "{name}: same statuses"
        );
        // Per-zone file at a 1-min step, interpolated linearly: the tide between grid times
        // differs from the direct one by the curvature between them (well under 1 mm here)
        // plus the 0.1-mm rounding of the written depths.
        let worst = column(&direct, "reduced_depth_m")
            .iter()
            .zip(column(&via, "reduced_depth_m"))
            .filter(|(a, b)| !a.is_empty() && !b.is_empty())
            .map(|(a, b)| (a.parse::<f64>().unwrap() - b.parse::<f64>().unwrap()).abs())
            .fold(0.0, f64::max);
        eprintln!("{name}: worst difference direct vs per-zone file {worst:.5} m");
        assert!(worst <= 0.001, "{name}: {worst}");
        // Per-sounding file: identical reduced depths, tides and statuses.
        let o = ebbwise(&[
            "apply",
            &p(&format!("corr/{name}.correctors.csv")),
            repo()
                .join(format!(
                    "zoning-demo/soundings/{}",
                    if name == "launch-a" {
                        "launch-a.csv"
                    } else {
                        "launch-b.txt"
                    }
                ))
                .to_str()
                .unwrap(),
            "--project",
            &demo(),
            "--out",
            &p("sound"),
        ]);
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        let via = d.path().join(format!("sound/{name}.applied.csv"));
        // The tide is applied as written (4 decimals), so the file, which holds the written
        // tide, reproduces the direct reduction on every row.
        for c in ["tide_m", "reduced_depth_m", "status", "zone"] {
            assert_eq!(column(&direct, c), column(&via, c), "{name}: column {c}");
        }
        // And the written columns add up: the demo's depths have 2 decimals, so written
        // tide_m + reduced_depth_m is the observed depth exactly (to float round-off of the
        // parse), on every reduced row.
        let depth_col = if name == "launch-a" {
            "depth_m"
        } else {
            "depth"
        };
        let (depth, tide, reduced) = (
            column(&direct, depth_col),
            column(&direct, "tide_m"),
            column(&direct, "reduced_depth_m"),
        );
        let mut checked = 0;
        for ((d, t), r) in depth.iter().zip(&tide).zip(&reduced) {
            let (Ok(d), Ok(t), Ok(r)) = (d.parse::<f64>(), t.parse::<f64>(), r.parse::<f64>())
            else {
                continue;
            };
            assert!(
                (d - t - r).abs() < 1e-9,
                "{name}: depth {d}, tide {t}, reduced {r} do not add up"
            );
            checked += 1;
        }
        let n_reduced = column(&direct, "status")
            .iter()
            .filter(|s| *s == "reduced")
            .count();
        assert!(n_reduced > 30_000, "{name}: {n_reduced} reduced rows");
        assert_eq!(checked, n_reduced, "{name}: every reduced row checked");
    }
}

#[test]
fn sidecar_hashes_every_input_and_changes_with_it() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    let run = |out: &str| {
        let o = ebbwise(&[
            "correctors",
            &p.project(),
            "--out",
            &p.path(out).to_string_lossy(),
        ]);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        let v: serde_json::Value = serde_json::from_slice(
            &std::fs::read(p.path(out).join("correctors-zones.csv.json")).unwrap(),
        )
        .unwrap();
        v
    };
    let a = run("a");
    assert_eq!(a["format"], "ebbwise-tide-correctors/4");
    assert_eq!(a["kind"], "per_zone");
    let roles: Vec<&str> = a["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["role"].as_str().unwrap())
        .collect();
    assert_eq!(roles, ["project", "zoning", "gauge record 'g1'"]);
    assert_eq!(a["gauges"][0]["zero_above_datum_m"], 1.0);
    assert_eq!(
        a["zoning"]["zones"][1]["feeds"][0]["time_corrector_min"],
        6.0
    );
    // ISO 8601 UTC to the millisecond, the form of every written time.
    let created = a["created_utc"].as_str().unwrap();
    assert!(
        created.len() == 24 && created.ends_with('Z') && &created[19..20] == ".",
        "{created}"
    );
    // The hash of the gauge record equals an independent SHA-256 (FIPS 180-4) of the file:
    // checked against the standard's "abc" example first.
    let abc = p.path("abc.txt");
    std::fs::write(&abc, b"abc").unwrap();
    assert_eq!(
        ebbwise::io::correctors_file::sha256_file(&abc).unwrap(),
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    );
    // Change one reading: only the gauge record's hash changes.
    let g = std::fs::read_to_string(p.path("g1.csv"))
        .unwrap()
        .replacen("1.000", "1.001", 1);
    p.write("g1.csv", &g);
    let b = run("b");
    let h =
        |v: &serde_json::Value, i: usize| v["inputs"][i]["sha256"].as_str().unwrap().to_string();
    assert_eq!(h(&a, 0), h(&b, 0));
    assert_eq!(h(&a, 1), h(&b, 1));
    assert_ne!(h(&a, 2), h(&b, 2));
    assert_eq!(h(&a, 2).len(), 64);
}

#[test]
fn a_span_without_gauge_data_gives_missing_rows_never_values() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    // The gauge runs 00:00-04:00 with a gap 02:00-03:00; ask for 23:50 the day before to 04:10.
    let o = ebbwise(&[
        "correctors",
        &p.project(),
        "--out",
        &p.path("c").to_string_lossy(),
        "--from",
        "2026-06-13T23:50:00Z",
        "--to",
        "2026-06-14T04:10:00Z",
        "--step-min",
        "5",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let (h, rows) = read_csv(&p.path("c/correctors-zones.csv"));
    assert_eq!(
        h,
        [
            "zone",
            "time_utc",
            "tide_m",
            "u_tide_m",
            "status",
            "u_tide_gauge_m",
            "u_tide_datum_m",
            "u_tide_range_m",
            "u_tide_timing_m",
            "u_tide_zone_m",
            "status_detail"
        ]
    );
    let z1: Vec<_> = rows.iter().filter(|r| r[0] == "Z1").collect();
    assert_eq!(z1.len(), 53, "23:50 to 04:10 every 5 min: 260 min / 5 + 1");
    for r in &z1 {
        let t = &r[1];
        let missing = t.as_str() < "2026-06-14T00:00:00.000Z"
            || (t.as_str() > "2026-06-14T02:00:00.000Z" && t.as_str() < "2026-06-14T03:00:00.000Z")
            || t.as_str() > "2026-06-14T04:00:00.000Z";
        if missing {
            assert_eq!((r[2].as_str(), r[4].as_str()), ("", "missing"), "{r:?}");
        } else {
            assert!(!r[2].is_empty() && r[4] != "missing", "{r:?}");
        }
    }
    // Z1 at 00:30 is a gauge sample (Δt 0): observed, 2.0 + 0.030 = 2.03 m.
    let r = z1
        .iter()
        .find(|r| r[1] == "2026-06-14T00:30:00.000Z")
        .unwrap();
    assert_eq!(r[2], "2.0300", "{r:?}");
    assert_eq!(r[4], "observed");
    // Z1 at 00:10 lies between samples 00:06 and 00:12: interpolated.
    let r = z1
        .iter()
        .find(|r| r[1] == "2026-06-14T00:10:00.000Z")
        .unwrap();
    assert_eq!(r[4], "interpolated");
    assert!(stderr(&o).contains("u_tide_m left empty"));
}

#[test]
fn a_file_that_is_not_a_correction_file_is_refused_with_its_header() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    let o = ebbwise(&[
        "apply",
        &p.path("s.csv").to_string_lossy(),
        "--project",
        &p.project(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o)
            .contains("s.csv:1: not a tide-correction file: expected the header 'zone,time_utc,"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn a_step_longer_than_a_gauge_gap_limit_is_warned_about() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    let o = ebbwise(&[
        "correctors",
        &p.project(),
        "--out",
        &p.path("c").to_string_lossy(),
        "--step-min",
        "45",
    ]);
    assert_eq!(o.status.code(), Some(0));
    assert!(
        stderr(&o).contains(
            "warning: the step (45 min) is longer than gauge 'g1''s max_gap_min (30 min)"
        ),
        "{}",
        stderr(&o)
    );
}

#[test]
fn per_sounding_rows_sharing_line_and_time_are_refused() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    p.write(
        "c.csv",
        "line,time_utc,source_file,source_line,zone,tide_m,u_tide_m,status\n\
         L1,2026-06-14T01:00:00.000Z,s.csv,2,Z1,2.0600,,reduced\n\
         L1,2026-06-14T01:00:00.000Z,s.csv,3,Z2,1.4700,,reduced\n",
    );
    let o = ebbwise(&[
        "apply",
        &p.path("c.csv").to_string_lossy(),
        "--project",
        &p.project(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("c.csv:3: field 'time_utc': another row has the same line 'L1' and time but a different zone or tide"), "{}", stderr(&o));
}

#[test]
fn per_line_series_round_trip() {
    let d = tempfile::tempdir().unwrap();
    let p = |s: &str| d.path().join(s).to_string_lossy().into_owned();
    assert_eq!(
        ebbwise(&[
            "reduce",
            &demo(),
            "--out",
            &p("direct"),
            "--no-progress",
            "--no-uncertainty"
        ])
        .status
        .code(),
        Some(1)
    );
    let o = ebbwise(&["correctors", &demo(), "--out", &p("corr"), "--per-line"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let side: serde_json::Value = serde_json::from_slice(
        &std::fs::read(d.path().join("corr/correctors-lines.csv.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(side["kind"], "per_line");
    assert_eq!(
        side["inputs"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|i| i["role"] == "soundings")
            .count(),
        2
    );
    let (h, rows) = read_csv(&d.path().join("corr/correctors-lines.csv"));
    assert_eq!(
        h,
        [
            "line",
            "time_utc",
            "zone",
            "tide_m",
            "u_tide_m",
            "status",
            "u_tide_gauge_m",
            "u_tide_datum_m",
            "u_tide_range_m",
            "u_tide_timing_m",
            "u_tide_zone_m",
            "status_detail"
        ]
    );
    assert!(rows.iter().any(|r| r[0] == "A-001") && rows.iter().any(|r| r[0] == "B-001"));
    let o = ebbwise(&[
        "apply",
        &p("corr/correctors-lines.csv"),
        "--project",
        &demo(),
        "--out",
        &p("lines"),
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    for name in ["launch-a", "launch-b"] {
        let direct = d.path().join(format!("direct/{name}.reduced.csv"));
        let via = d.path().join(format!("lines/{name}.applied.csv"));
        let (a, b) = (
            column(&direct, "reduced_depth_m"),
            column(&via, "reduced_depth_m"),
        );
        let (za, zb) = (column(&direct, "zone"), column(&via, "zone"));
        // A sounding outside every zone is outside_zoning through the line file too, never given
        // the line's tide.
        let (sa, sb) = (column(&direct, "status"), column(&via, "status"));
        let outside: Vec<usize> = (0..sa.len())
            .filter(|&k| sa[k] == "outside_zoning")
            .collect();
        assert!(
            name == "launch-b" || outside.len() == 67,
            "{name}: {}",
            outside.len()
        );
        for &k in &outside {
            assert_eq!(sb[k], "outside_zoning", "{name} row {k}");
        }
        // The line grid brackets each line's first and last sounding: every sounding keeps the
        // status the direct reduction gives it (none lost at a line's ends).
        for k in 0..sa.len() {
            assert_eq!(sa[k], sb[k], "{name} row {k}");
        }
        let mut compared = 0;
        for k in 0..a.len() {
            if a[k].is_empty() || b[k].is_empty() {
                continue;
            }
            compared += 1;
            assert_eq!(za[k], zb[k], "{name} row {k}: same zone");
            let diff = (a[k].parse::<f64>().unwrap() - b[k].parse::<f64>().unwrap()).abs();
            assert!(diff <= 0.001, "{name} row {k}: {diff}");
        }
        // Launch B loses ~15 % of its rows to the pendrath gap and skellan's flagged samples.
        assert!(compared > 35_000, "{name}: {compared}");
    }
}

#[test]
fn per_sounding_times_keep_their_precision_and_find_their_rows() {
    // Two soundings 0.25 ms apart on one line, and one on a whole millisecond: the key of each
    // must read back to its own microsecond, or `apply` would find the wrong row or none.
    let p = MiniProject::new(
        "time,lon,lat,depth,line\n\
         2026-06-14T01:00:00.000250Z,10.005,50.005,10.0,L1\n\
         2026-06-14T01:00:00.0005Z,10.015,50.005,10.0,L1\n\
         2026-06-14T01:00:00.5Z,10.005,50.005,10.0,L1\n",
    );
    let o = ebbwise(&[
        "correctors",
        &p.project(),
        "--out",
        &p.path("c").to_string_lossy(),
        "--per-sounding",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(
        column(&p.path("c/s.correctors.csv"), "time_utc"),
        [
            "2026-06-14T01:00:00.000250Z",
            "2026-06-14T01:00:00.000500Z",
            "2026-06-14T01:00:00.500Z"
        ]
    );
    let o = ebbwise(&[
        "apply",
        &p.path("c/s.correctors.csv").to_string_lossy(),
        "--project",
        &p.project(),
        "--out",
        &p.path("a").to_string_lossy(),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let o = ebbwise(&[
        "reduce",
        &p.project(),
        "--out",
        &p.path("r").to_string_lossy(),
        "--no-progress",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // Z1 (Δt 0, R 1) and Z2 (Δt +6 min, R 0.5, zone mean 1.5 m) differ in tide, so a sounding
    // given the other's row would show it.
    for c in ["zone", "tide_m", "status"] {
        assert_eq!(
            column(&p.path("a/s.applied.csv"), c),
            column(&p.path("r/s.reduced.csv"), c),
            "{c}"
        );
    }
    assert_eq!(
        column(&p.path("a/s.applied.csv"), "zone"),
        ["Z1", "Z2", "Z1"]
    );
}

/// A multibeam-like file: each ping's beams share line and time, and the pings of line L1 cross
/// the edge between Z1 and Z2 (lon 10.01: four beams each side). `check` warns before anything
/// is written, with the count of soundings and keys, and points to the per-zone file; the same
/// pings moved wholly inside Z1 get no such warning.
#[test]
fn check_warns_of_pings_across_a_zone_edge() {
    let pings = |first_beam_lon: f64| {
        let mut csv = String::from("time,lon,lat,depth,line\n");
        for ping in 0..5 {
            for beam in 0..8 {
                csv.push_str(&format!(
                    "2026-06-14T01:00:0{ping}.500Z,{:.5},50.005,10.0,L1\n",
                    first_beam_lon + 0.0001 * beam as f64
                ));
            }
        }
        csv
    };
    let p = MiniProject::new(&pings(10.00965));
    let err = stderr(&ebbwise(&["check", &p.project()]));
    assert!(
        err.contains("s.csv: 20 sounding(s) share a line and time with a sounding in another zone (5 line-and-time key(s), first line 'L1' at 2026-06-14T01:00:00.500Z)")
            && err.contains("use the per-zone correction file"),
        "{err}"
    );
    // At write time: `correctors --per-sounding` writes the file and warns with the count.
    let c = p.path("c").to_string_lossy().into_owned();
    let o = ebbwise(&["correctors", &p.project(), "--out", &c, "--per-sounding"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(0), "{err}");
    assert!(
        err.contains("20 row(s) share a line and time with a row of another zone (5 line-and-time key(s), first line 'L1' at 2026-06-14T01:00:00.500Z)")
            && err.contains("`ebbwise apply` will refuse this file; use the per-zone correction file"),
        "{err}"
    );
    p.write("s.csv", &pings(10.00105));
    let err = stderr(&ebbwise(&["check", &p.project()]));
    assert!(!err.contains("share a line and time"), "{err}");
    let o = ebbwise(&["correctors", &p.project(), "--out", &c, "--per-sounding"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(0), "{err}");
    assert!(!err.contains("share a line and time"), "{err}");
}

/// A zone the project's zoning does not have is refused at the line of its first row.
#[test]
fn an_unknown_zone_is_refused_at_its_line() {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n");
    p.write(
        "c.csv",
        "zone,time_utc,tide_m,u_tide_m,status\n\
         Z1,2026-06-14T01:00:00.000Z,2.0600,,observed\n\
         Z9,2026-06-14T01:00:00.000Z,2.0600,,observed\n",
    );
    let o = ebbwise(&[
        "apply",
        &p.path("c.csv").to_string_lossy(),
        "--project",
        &p.project(),
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("c.csv:3: field 'zone': zone 'Z9' is not in the project's zoning"),
        "{}",
        stderr(&o)
    );
}
