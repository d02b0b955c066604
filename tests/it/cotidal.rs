//! `ebbwise zones derive` and `ebbwise zones compare` on a project whose co-tidal field is known:
//! two gauges and two virtual gauges at the corners of a square of about 10 km, M2 of 1 m
//! everywhere with a phase lag growing eastwards by 20° over the square, S2 0.4 m at M2's lag +
//! 30°. A zone's time corrector relative to the south-west gauge is then
//! `(G_zone − G_gauge)/ω_M2` (DOMAIN §4.2), its range ratio 1; the phase field is linear in
//! longitude (the stations' phasors interpolated as complex numbers across at most 20° keep the
//! phase linear within 0.05°: the chord of a 20° arc departs from it by 1 − cos 10° = 1.5 % in
//! modulus and nothing in phase at its middle; a fact of geometry).

use super::{ebbwise, read_csv, stderr};

const OMEGA_M2_DEG_PER_MIN: f64 = 28.984_104_2 / 60.0;

fn g_at(lon: f64) -> f64 {
    100.0 + 20.0 * (lon - 10.0) / 0.14
}

fn constants(lon: f64) -> String {
    let g = g_at(lon);
    format!(
        "format = \"ebbwise-harmonic-constants/1\"\nlevels = \"above chart datum\"\nz0_m = 2.0\n\n\
         [[constituent]]\nname = \"M2\"\nspeed_deg_per_h = 28.9841042\namplitude_m = 1.0\nphase_deg = {g:.4}\n\n\
         [[constituent]]\nname = \"S2\"\nspeed_deg_per_h = 30.0\namplitude_m = 0.4\nphase_deg = {:.4}\n",
        g + 30.0
    )
}

fn square(lon0: f64, lat0: f64, d: f64) -> String {
    format!(
        "[[[{lon0},{lat0}],[{},{lat0}],[{},{}],[{lon0},{}],[{lon0},{lat0}]]]",
        lon0 + d,
        lon0 + d,
        lat0 + d,
        lat0 + d
    )
}

fn project(dir: &std::path::Path, with_virtual: bool, z2_time_corrector_min: f64) -> String {
    let rec = "time,height\n2026-06-14T00:00:00Z,1.0\n2026-06-14T00:06:00Z,1.1\n";
    for g in ["g1", "g2"] {
        std::fs::write(dir.join(format!("{g}.csv")), rec).unwrap();
    }
    std::fs::write(dir.join("g1.constants.toml"), constants(10.0)).unwrap();
    std::fs::write(dir.join("g2.constants.toml"), constants(10.14)).unwrap();
    std::fs::write(dir.join("v1.constants.toml"), constants(10.0)).unwrap();
    std::fs::write(dir.join("v2.constants.toml"), constants(10.14)).unwrap();
    let z1_dt = (g_at(10.04) - g_at(10.0)) / OMEGA_M2_DEG_PER_MIN;
    let zoning = format!(
        r#"{{"type":"FeatureCollection","features":[
{{"type":"Feature","properties":{{"zone":"Z1","gauge":"g1","time_corrector_min":{z1_dt:.2},"range_ratio":1.0}},"geometry":{{"type":"Polygon","coordinates":{}}}}},
{{"type":"Feature","properties":{{"zone":"Z2","gauge":"g1","time_corrector_min":{z2_time_corrector_min:.2},"range_ratio":1.0}},"geometry":{{"type":"Polygon","coordinates":{}}}}}
]}}"#,
        square(10.03, 50.03, 0.02),
        square(10.09, 50.03, 0.02)
    );
    std::fs::write(dir.join("zoning.geojson"), zoning).unwrap();
    let gauge = |id: &str, lon: f64| {
        format!(
            "[[gauge]]\nid = \"{id}\"\nlon = {lon}\nlat = 50.0\nrecord = \"{id}.csv\"\nunits = \"m\"\nzero_above_datum_m = 0.0\nmean_level_above_datum_m = 2.0\nmax_gap_min = 30\nconstants = \"{id}.constants.toml\"\n"
        )
    };
    let mut text = format!(
        "name = \"field\"\nzoning = \"zoning.geojson\"\n[output]\ndir = \"out\"\n{}{}",
        gauge("g1", 10.0),
        gauge("g2", 10.14)
    );
    if with_virtual {
        for (id, lon) in [("v1", 10.0), ("v2", 10.14)] {
            text.push_str(&format!(
                "[[virtual_gauge]]\nid = \"{id}\"\nlon = {lon}\nlat = 50.09\nconstants = \"{id}.constants.toml\"\n"
            ));
        }
    }
    let p = dir.join("project.toml");
    std::fs::write(&p, text).unwrap();
    p.to_string_lossy().into_owned()
}

fn column(header: &[String], row: &[String], name: &str) -> f64 {
    let i = header.iter().position(|h| h == name).unwrap();
    row[i].parse().unwrap()
}

/// `derive` recovers each zone's time corrector (within 0.5 min) and a range ratio between
/// cos 10° and 1 (the complex interpolation's own loss of modulus between stations whose phases
/// differ); `compare` flags only the zone with a planted 20-minute error, with the
/// spring difference `2·A_s·sin(ω·20 min / 2)`, A_s = M2 + S2 = 1.4 m (within 1 cm: the zone's
/// derived corrector is itself within 0.5 min).
#[test]
fn zones_derive_and_compare_on_a_known_field() {
    let d = tempfile::tempdir().unwrap();
    let z2_true = (g_at(10.10) - g_at(10.0)) / OMEGA_M2_DEG_PER_MIN;
    let p = project(d.path(), true, z2_true + 20.0);
    let out = d.path().join("derived.csv");
    let o = ebbwise(&[
        "zones",
        "derive",
        "--project",
        &p,
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("4 stations (g1, g2, v1 (virtual), v2 (virtual))"),
        "{}",
        stderr(&o)
    );
    let (h, rows) = read_csv(&out);
    assert_eq!(rows.len(), 2);
    for (row, want) in rows
        .iter()
        .zip([(g_at(10.04) - g_at(10.0)) / OMEGA_M2_DEG_PER_MIN, z2_true])
    {
        let dt = column(&h, row, "derived_time_corrector_min");
        assert!((dt - want).abs() < 0.5, "{}: {dt} vs {want}", row[0]);
        let r = column(&h, row, "derived_range_ratio");
        // Between cos 10° (a point midway between stations 20° apart) and 1 (at a station).
        assert!((0.98..=1.0).contains(&r), "{}: R {r}", row[0]);
        assert_eq!(column(&h, row, "outside_hull_max_m"), 0.0);
    }

    let out = d.path().join("compare.csv");
    let o = ebbwise(&[
        "zones",
        "compare",
        "--project",
        &p,
        "--threshold-m",
        "0.05",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let err = stderr(&o);
    let flagged: Vec<&str> = err.lines().filter(|l| l.ends_with("DISAGREES")).collect();
    assert_eq!(flagged.len(), 1, "{err}");
    assert!(flagged[0].trim_start().starts_with("Z2"), "{err}");
    let (h, rows) = read_csv(&out);
    let want = 2.0 * 1.4 * (OMEGA_M2_DEG_PER_MIN * 20.0 / 2.0).to_radians().sin();
    let got = column(&h, &rows[1], "spring_difference_m");
    assert!((got - want).abs() < 0.01, "{got} vs {want}");
    // Z1's zoning is the linear truth: what is left is the complex interpolation's loss of
    // modulus (at most 1.5 % of 1.4 m) and the half-minute tolerance (0.006 m).
    assert!(column(&h, &rows[0], "spring_difference_m") < 0.03);
}

/// Two stations make no field: refused (exit 2), naming what is missing.
#[test]
fn a_field_of_two_stations_is_refused() {
    let d = tempfile::tempdir().unwrap();
    let p = project(d.path(), false, 0.0);
    let o = ebbwise(&["zones", "derive", "--project", &p]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("at least three stations not on one line; 2 given"),
        "{}",
        stderr(&o)
    );
}

/// The demo reduced with a continuous tide (`zoning-demo/continuous.toml`): the summary and the
/// QA report name the model, the report is valid against its schema, carries the field's inputs
/// and no zone inputs, draws a tide at every zone and lists no zone-boundary step (the tide is
/// the same either side of an edge); `correctors` writes per-sounding files only and refuses the
/// per-zone and per-line series with the reason (docs/correctors.md).
#[test]
fn a_continuous_reduction_reports_its_model_and_refuses_zone_series() {
    let project = super::repo().join("zoning-demo/continuous.toml");
    let p = project.to_str().unwrap();
    let out = tempfile::tempdir().unwrap();
    let o = out.path().to_str().unwrap();
    let r = ebbwise(&["reduce", p, "--out", o, "--no-progress"]);
    assert_eq!(r.status.code(), Some(1), "{}", stderr(&r));
    assert!(
        stderr(&r).contains("tide: continuous between the gauges (corrector_field"),
        "{}",
        stderr(&r)
    );
    let summary: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.path().join("reduce-summary.json")).unwrap())
            .unwrap();
    assert_eq!(summary["tide_model"], "corrector_field");
    let report: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.path().join("qa-report.json")).unwrap()).unwrap();
    let schema: serde_json::Value = serde_json::from_slice(
        &std::fs::read(super::repo().join("docs/qa-report.schema.json")).unwrap(),
    )
    .unwrap();
    let validator = jsonschema::validator_for(&schema).unwrap();
    let errors: Vec<String> = validator
        .iter_errors(&report)
        .map(|e| e.to_string())
        .collect();
    assert!(errors.is_empty(), "{errors:#?}");
    assert_eq!(report["tide_model"], "corrector_field");
    assert_eq!(report["boundary_steps"].as_array().unwrap().len(), 0);
    assert_eq!(report["inputs"]["zones"].as_array().unwrap().len(), 0);
    let f = &report["inputs"]["tide_field"];
    assert_eq!(f["mode"], "corrector_field");
    assert_eq!(f["stations"].as_array().unwrap().len(), 10);
    assert_eq!(f["blended_gauges"].as_array().unwrap().len(), 3);
    let series = report["tide_series"].as_array().unwrap();
    assert_eq!(series.len(), 7);
    for s in series {
        let tides = s["tide_m"].as_array().unwrap();
        assert!(
            tides.iter().filter(|t| t.is_number()).count() > tides.len() / 2,
            "zone {}: too few tides",
            s["zone"]
        );
    }
    let html = std::fs::read_to_string(out.path().join("qa-report.html")).unwrap();
    assert!(html.contains("The tide is continuous between the gauges"));
    assert!(html.contains("class=\"tide-field\""));
    // The correction files.
    let c = tempfile::tempdir().unwrap();
    let co = c.path().to_str().unwrap();
    let r = ebbwise(&["correctors", p, "--out", co]);
    assert_eq!(r.status.code(), Some(2));
    assert!(
        stderr(&r).contains("no per-zone series can stand for it"),
        "{}",
        stderr(&r)
    );
    let r = ebbwise(&["correctors", p, "--out", co, "--per-sounding", "--per-line"]);
    assert_eq!(r.status.code(), Some(2));
    assert!(
        stderr(&r).contains("no per-line series is written"),
        "{}",
        stderr(&r)
    );
    let r = ebbwise(&["correctors", p, "--out", co, "--per-sounding"]);
    assert_eq!(r.status.code(), Some(0), "{}", stderr(&r));
    assert!(!c.path().join("correctors-zones.csv").exists());
    let sidecar: serde_json::Value = serde_json::from_slice(
        &std::fs::read(c.path().join("launch-a.correctors.csv.json")).unwrap(),
    )
    .unwrap();
    let tide = &sidecar["project_inputs"]["tide"];
    assert_eq!(tide["tide_field_mode"], "corrector_field");
    assert_eq!(tide["virtual_gauges"].as_array().unwrap().len(), 7);
    assert!(
        tide["gauges"][0]["lon"].is_number(),
        "a gauge's position changes the tide"
    );
    // Applied to its own soundings, the per-sounding file gives the reduction's tides.
    let a = tempfile::tempdir().unwrap();
    let r = ebbwise(&[
        "apply",
        c.path().join("launch-a.correctors.csv").to_str().unwrap(),
        "--project",
        p,
        "--out",
        a.path().to_str().unwrap(),
    ]);
    assert_eq!(r.status.code(), Some(1), "{}", stderr(&r));
    let (h1, direct) = read_csv(&out.path().join("launch-a.reduced.csv"));
    let (h2, applied) = read_csv(&a.path().join("launch-a.applied.csv"));
    let t1 = h1.iter().position(|x| x == "tide_m").unwrap();
    let t2 = h2.iter().position(|x| x == "tide_m").unwrap();
    assert_eq!(direct.len(), applied.len());
    for (d, ap) in direct.iter().zip(&applied) {
        assert_eq!(d[t1], ap[t2]);
    }
}
