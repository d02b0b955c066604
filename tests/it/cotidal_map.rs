//! `ebbwise zones map` on projects whose M2 field is known: two gauges at latitude 50° and two
//! virtual gauges at 50.09°, at longitudes 10° and 10.14° (a square of about 10 km), M2's phase
//! growing linearly eastwards and its amplitude northwards. The stations' phasors are
//! interpolated linearly on the triangulation; between stations at most 20° apart in phase the
//! interpolated phase departs from the linear one by less than 0.05° (the argument of
//! `(1 − w) + w·e^{−i·20°}` against `w·20°`: trigonometry), and a field of one phase
//! interpolates its amplitude exactly linearly. A line at phase φ then lies at the longitude
//! where the linear phase is φ (analytic: phase = a·lon + b, line at lon = (φ − b)/a), within
//! the grid's tolerance of half a cell (100 m cells: 0.0007° of longitude, 0.00045° of
//! latitude at 50°N), and likewise for amplitude in latitude.

use super::{ebbwise, stderr};

const LON_W: f64 = 10.0;
const LON_E: f64 = 10.14;
const LAT_S: f64 = 50.0;
const LAT_N: f64 = 50.09;
/// Half a 100-m cell in longitude at 50°N, degrees.
const TOL_LON: f64 = 0.0007;
/// Half a 100-m cell in latitude, degrees.
const TOL_LAT: f64 = 0.00045;

fn constants(amp: f64, g: f64) -> String {
    format!(
        "format = \"ebbwise-harmonic-constants/1\"\nlevels = \"above chart datum\"\nz0_m = 2.0\n\n\
         [[constituent]]\nname = \"M2\"\nspeed_deg_per_h = 28.9841042\namplitude_m = {amp}\nphase_deg = {:.4}\n\n\
         [[constituent]]\nname = \"S2\"\nspeed_deg_per_h = 30.0\namplitude_m = 0.4\nphase_deg = {:.4}\n",
        g.rem_euclid(360.0),
        (g + 30.0).rem_euclid(360.0)
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

/// A project whose M2 has phase `g_w` in the west and `g_e` in the east (unwrapped) and
/// amplitude `a_s` in the south and `a_n` in the north, with two adjacent zones Z1 | Z2.
fn project(dir: &std::path::Path, g_w: f64, g_e: f64, a_s: f64, a_n: f64) -> String {
    let rec = "time,height\n2026-06-14T00:00:00Z,1.0\n2026-06-14T00:06:00Z,1.1\n2026-06-14T00:12:00Z,1.2\n";
    for g in ["g1", "g2"] {
        std::fs::write(dir.join(format!("{g}.csv")), rec).unwrap();
    }
    std::fs::write(dir.join("g1.constants.toml"), constants(a_s, g_w)).unwrap();
    std::fs::write(dir.join("g2.constants.toml"), constants(a_s, g_e)).unwrap();
    std::fs::write(dir.join("v1.constants.toml"), constants(a_n, g_w)).unwrap();
    std::fs::write(dir.join("v2.constants.toml"), constants(a_n, g_e)).unwrap();
    let zoning = format!(
        r#"{{"type":"FeatureCollection","features":[
{{"type":"Feature","properties":{{"zone":"Z1","gauge":"g1","time_corrector_min":0,"range_ratio":1.0}},"geometry":{{"type":"Polygon","coordinates":{}}}}},
{{"type":"Feature","properties":{{"zone":"Z2","gauge":"g2","time_corrector_min":0,"range_ratio":1.1}},"geometry":{{"type":"Polygon","coordinates":{}}}}}
]}}"#,
        square(10.03, 50.03, 0.03),
        square(10.06, 50.03, 0.03)
    );
    std::fs::write(dir.join("zoning.geojson"), zoning).unwrap();
    let gauge = |id: &str, lon: f64| {
        format!(
            "[[gauge]]\nid = \"{id}\"\nlon = {lon}\nlat = {LAT_S}\nrecord = \"{id}.csv\"\nunits = \"m\"\nzero_above_datum_m = 0.0\nmean_level_above_datum_m = 2.0\nmax_gap_min = 30\nconstants = \"{id}.constants.toml\"\n"
        )
    };
    let mut text = format!(
        "name = \"map\"\nzoning = \"zoning.geojson\"\n[output]\ndir = \"out\"\n{}{}",
        gauge("g1", LON_W),
        gauge("g2", LON_E)
    );
    for (id, lon) in [("v1", LON_W), ("v2", LON_E)] {
        text.push_str(&format!(
            "[[virtual_gauge]]\nid = \"{id}\"\nlon = {lon}\nlat = {LAT_N}\nconstants = \"{id}.constants.toml\"\n"
        ));
    }
    let p = dir.join("project.toml");
    std::fs::write(&p, text).unwrap();
    p.to_string_lossy().into_owned()
}

fn run_map(dir: &std::path::Path, p: &str, extra: &[&str]) -> (serde_json::Value, String, String) {
    let mut args = vec!["zones", "map", "--project", p];
    args.extend_from_slice(extra);
    let o = ebbwise(&args);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let gj = std::fs::read_to_string(dir.join("out/cotidal.geojson")).unwrap();
    let svg = std::fs::read_to_string(dir.join("out/cotidal.svg")).unwrap();
    (serde_json::from_str(&gj).unwrap(), svg, stderr(&o))
}

/// Features of one kind inside the hull: (value, coordinates).
fn inside(gj: &serde_json::Value, kind: &str) -> Vec<(f64, Vec<(f64, f64)>)> {
    let key = if kind == "phase" {
        "phase_deg"
    } else {
        "amplitude_m"
    };
    gj["features"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["properties"]["kind"] == kind && f["properties"]["inside_hull"] == true)
        .map(|f| {
            let g = &f["geometry"];
            let parts: Vec<&serde_json::Value> = if g["type"] == "LineString" {
                vec![&g["coordinates"]]
            } else {
                g["coordinates"].as_array().unwrap().iter().collect()
            };
            let pts = parts
                .iter()
                .flat_map(|p| p.as_array().unwrap().iter())
                .map(|c| (c[0].as_f64().unwrap(), c[1].as_f64().unwrap()))
                .collect();
            (f["properties"][key].as_f64().unwrap(), pts)
        })
        .collect()
}

/// A minimal XML well-formedness check: one root, every start tag closed in order, attribute
/// values quoted, no stray `<` or `&` (the XML 1.0 rules an SVG file breaks most often).
fn check_xml(s: &str) {
    let body = s.trim_start();
    let body = match body.strip_prefix("<?xml") {
        Some(r) => &r[r.find("?>").expect("XML declaration closed") + 2..],
        None => body,
    };
    let mut stack: Vec<String> = Vec::new();
    let mut roots = 0;
    let mut rest = body;
    while let Some(i) = rest.find(['<', '&']) {
        let text = &rest[..i];
        assert!(
            !stack.is_empty() || text.trim().is_empty(),
            "text outside the root: {text}"
        );
        rest = &rest[i..];
        if rest.starts_with('&') {
            let end = rest.find(';').expect("entity closed");
            let ent = &rest[1..end];
            assert!(
                ["amp", "lt", "gt", "quot", "apos"].contains(&ent) || ent.starts_with('#'),
                "unknown entity &{ent};"
            );
            rest = &rest[end + 1..];
            continue;
        }
        let end = rest.find('>').expect("tag closed");
        let tag = &rest[1..end];
        rest = &rest[end + 1..];
        if let Some(name) = tag.strip_prefix('/') {
            let open = stack.pop().expect("a closing tag has its start");
            assert_eq!(open, name.trim(), "tags close in order");
            continue;
        }
        assert!(!tag.contains('<'), "stray '<' in <{tag}>");
        let name: String = tag
            .chars()
            .take_while(|c| !c.is_whitespace() && *c != '/')
            .collect();
        // Attributes: name="value" pairs.
        let attrs = tag[name.len()..].trim_end_matches('/');
        let quotes = attrs.matches('"').count();
        assert!(quotes % 2 == 0, "unquoted attribute in <{tag}>");
        if stack.is_empty() {
            roots += 1;
        }
        if !tag.ends_with('/') {
            stack.push(name);
        }
    }
    assert!(stack.is_empty(), "unclosed: {stack:?}");
    assert_eq!(roots, 1, "one root element");
}

/// Phase 100°..120° west to east, lines every 7°: 105°, 112° and 119° (none at the ends, where
/// the field carried out of the hull is flat), straight north–south and at the analytic
/// longitudes `10 + (φ − 100)/20 · 0.14`, so evenly spaced; the GeoJSON's coordinates are
/// longitude/latitude near the stations; the SVG is well-formed XML and names every zone and
/// station.
#[test]
fn linear_phase_gives_evenly_spaced_co_tidal_lines() {
    let d = tempfile::tempdir().unwrap();
    let p = project(d.path(), 100.0, 120.0, 1.0, 1.0);
    let (gj, svg, err) = run_map(d.path(), &p, &["--phase-step-deg", "7"]);
    assert_eq!(gj["type"], "FeatureCollection");
    let lines = inside(&gj, "phase");
    let values: Vec<f64> = lines.iter().map(|l| l.0).collect();
    assert_eq!(values, vec![105.0, 112.0, 119.0], "{err}");
    for (phi, pts) in &lines {
        let lon_want = LON_W + (phi - 100.0) / 20.0 * (LON_E - LON_W);
        assert!(pts.len() >= 2);
        for (lon, lat) in pts {
            assert!(
                (lon - lon_want).abs() < TOL_LON,
                "{phi}°: {lon} vs {lon_want}"
            );
            assert!((LAT_S - TOL_LAT..=LAT_N + TOL_LAT).contains(lat), "{lat}");
        }
    }
    // Every coordinate of every feature is WGS 84 longitude/latitude near the area (the margin
    // is a tenth of its size).
    for f in gj["features"].as_array().unwrap() {
        assert_eq!(f["properties"]["constituent"], "M2");
        let s = f["geometry"]["coordinates"].to_string();
        let nums: Vec<f64> = s
            .split(|c: char| !(c.is_ascii_digit() || c == '.' || c == '-'))
            .filter(|t| !t.is_empty())
            .map(|t| t.parse().unwrap())
            .collect();
        for c in nums.chunks(2) {
            assert!((9.98..=10.16).contains(&c[0]), "lon {}", c[0]);
            assert!((49.99..=50.1).contains(&c[1]), "lat {}", c[1]);
        }
    }
    check_xml(&svg);
    for id in ["Z1", "Z2", "g1", "g2", "v1", "v2"] {
        assert!(svg.contains(&format!(">{id}</text>")), "{id} on the map");
    }
    assert!(svg.contains("qualified hydrographic review"), "caution");
    assert!(svg.contains(r#"class="scale-bar""#) && svg.contains(r#"class="north""#));
    assert_eq!(svg.matches(r#"class="gauge""#).count(), 2);
    assert_eq!(svg.matches(r#"class="virtual-gauge""#).count(), 2);
    // Z1 | Z2 share an edge: drawn, coloured by its step.
    assert!(svg.contains(r#"class="step-edge""#), "{err}");
}

/// Phase 350.5° in the west to 9.5° in the east (across 360°): lines labelled 355, 0 and 5, at
/// the analytic longitudes of the unwrapped phase, and no line where the written phase wraps
/// from 359.x to 0.x (a contour of the raw values would draw every level there).
#[test]
fn co_tidal_lines_across_the_wrap() {
    let d = tempfile::tempdir().unwrap();
    let p = project(d.path(), 350.5, 369.5, 1.0, 1.0);
    let (gj, _, err) = run_map(d.path(), &p, &[]);
    let lines = inside(&gj, "phase");
    let values: Vec<f64> = lines.iter().map(|l| l.0).collect();
    assert_eq!(values, vec![355.0, 0.0, 5.0], "{err}");
    for (phi, pts) in &lines {
        let unwrapped = if *phi > 180.0 { *phi } else { phi + 360.0 };
        let lon_want = LON_W + (unwrapped - 350.5) / 19.0 * (LON_E - LON_W);
        for (lon, _) in pts {
            assert!(
                (lon - lon_want).abs() < TOL_LON,
                "{phi}°: {lon} vs {lon_want}"
            );
        }
    }
}

/// One phase everywhere and amplitude 1.0 m in the south to 1.2 m in the north, lines every
/// 0.07 m: 1.05, 1.12 and 1.19 m, east–west at the analytic latitudes
/// `50 + (A − 1)/0.2 · 0.09`; no co-tidal line (the phase is one value).
#[test]
fn linear_amplitude_gives_evenly_spaced_co_range_lines() {
    let d = tempfile::tempdir().unwrap();
    let p = project(d.path(), 100.0, 100.0, 1.0, 1.2);
    let (gj, _, err) = run_map(d.path(), &p, &["--amplitude-step-m", "0.07"]);
    let lines = inside(&gj, "amplitude");
    let values: Vec<f64> = lines.iter().map(|l| l.0).collect();
    assert_eq!(values, vec![1.05, 1.12, 1.19], "{err}");
    for (a, pts) in &lines {
        let lat_want = LAT_S + (a - 1.0) / 0.2 * (LAT_N - LAT_S);
        for (_, lat) in pts {
            assert!(
                (lat - lat_want).abs() < TOL_LAT,
                "{a} m: {lat} vs {lat_want}"
            );
        }
    }
    assert!(inside(&gj, "phase").is_empty());
}

/// Without the gauge records the field's map is still written, and says the zone-boundary
/// steps are not drawn and why (the records are needed only for them).
#[test]
fn without_records_the_map_has_no_steps_and_says_so() {
    let d = tempfile::tempdir().unwrap();
    let p = project(d.path(), 100.0, 120.0, 1.0, 1.0);
    std::fs::remove_file(d.path().join("g1.csv")).unwrap();
    let (gj, svg, err) = run_map(d.path(), &p, &[]);
    assert!(!inside(&gj, "phase").is_empty());
    assert!(err.contains("zone-boundary steps not drawn"), "{err}");
    assert!(svg.contains("zone-boundary steps not drawn"));
    assert!(!svg.contains(r#"class="step-edge""#));
}
