//! The QA report of the demo survey: schema-valid JSON, consistent per-sounding columns,
//! budgets whose shares sum to 1, and an HTML page with its four plots and no outside resources.

use super::{ebbwise, read_csv, repo, stderr};

fn reduce_demo(extra: &[&str]) -> (tempfile::TempDir, String) {
    let out = tempfile::tempdir().unwrap();
    let mut args = vec![
        "reduce",
        repo()
            .join("zoning-demo/project.toml")
            .to_str()
            .unwrap()
            .to_string()
            .leak() as &str,
        "--out",
        out.path().to_str().unwrap().to_string().leak(),
        "--no-progress",
    ];
    args.extend_from_slice(extra);
    let o = ebbwise(&args);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    (out, stderr(&o))
}

#[test]
fn json_report_is_schema_valid_and_consistent() {
    let (out, err) = reduce_demo(&[]);
    let report = report_of(out.path());
    let schema: serde_json::Value =
        serde_json::from_slice(&std::fs::read(repo().join("docs/qa-report.schema.json")).unwrap())
            .unwrap();
    let validator = jsonschema::validator_for(&schema).unwrap();
    let errors: Vec<String> = validator
        .iter_errors(&report)
        .map(|e| format!("{} at {}", e, e.instance_path))
        .collect();
    assert!(errors.is_empty(), "{errors:#?}");
    // The schema itself can fail: a report missing a field is rejected.
    let mut broken = report.clone();
    broken.as_object_mut().unwrap().remove("survey");
    assert!(!validator.is_valid(&broken));

    // Budget shares sum to 1 overall and per zone.
    for g in std::iter::once(&report["survey"]).chain(report["zones"].as_array().unwrap()) {
        let total: f64 = g["budget"]["components"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["mean_share"].as_f64().unwrap())
            .sum();
        // Each of the six is rounded to 0.001 on its own (docs/outputs.md): within 6 × 0.0005.
        assert!((total - 1.0).abs() <= 0.003 + 1e-9, "{}: {total}", g["id"]);
    }
    // Each zone's chart-datum value as the report states it is the one in every reduced
    // sounding's datum column; the demo's zone-mean zones carry it from their gauges.
    let datum_of: std::collections::HashMap<String, (f64, String)> = report["inputs"]["zones"]
        .as_array()
        .unwrap()
        .iter()
        .map(|z| {
            (
                z["zone"].as_str().unwrap().to_string(),
                (
                    z["u_datum_m"].as_f64().unwrap(),
                    z["datum_from"].as_str().unwrap().to_string(),
                ),
            )
        })
        .collect();
    let froms: std::collections::BTreeSet<&str> =
        datum_of.values().map(|(_, f)| f.as_str()).collect();
    assert_eq!(
        froms,
        ["gauges", "gauges_scaled"].into_iter().collect(),
        "{datum_of:?}"
    );
    let (header, rows) = read_csv(&out.path().join("launch-a.reduced.csv"));
    let col = |n: &str| header.iter().position(|h| h == n).unwrap();
    let (zone, status, datum) = (col("zone"), col("status"), col("u_tide_datum_m"));
    let mut checked = 0;
    for r in rows.iter().filter(|r| r[status] == "reduced") {
        let (u, _) = &datum_of[&r[zone]];
        assert_eq!(r[datum], format!("{u:.4}"), "zone {}", r[zone]);
        checked += 1;
    }
    assert!(checked > 1000, "{checked}");
    let reduced = report["rows_by_status"]["reduced"].as_u64().unwrap();
    assert_eq!(report["survey"]["soundings"].as_u64(), Some(reduced));
    let zone_sum: u64 = report["zones"]
        .as_array()
        .unwrap()
        .iter()
        .map(|z| z["soundings"].as_u64().unwrap())
        .sum();
    assert_eq!(zone_sum, reduced);
    // The demo's verdict, as the README shows it.
    assert_eq!(report["chosen_order"]["name"], "special");
    assert_eq!(report["achieved_order"], "1a");
    let dominant = report["dominant_component"].as_str().unwrap();
    assert!(
        err.contains(&format!(
            "strictest order met on the TVU limit alone: 1a; dominant component: {dominant}"
        )),
        "{err}"
    );
    assert!(
        err.contains("order special: ") && err.contains("NOT MET"),
        "{err}"
    );
    assert!(!report["failing_zones"].as_array().unwrap().is_empty());
}

/// The QA report a run wrote into `out`.
fn report_of(out: &std::path::Path) -> serde_json::Value {
    serde_json::from_slice(&std::fs::read(out.join("qa-report.json")).unwrap()).unwrap()
}

/// One reduced row of the demo's reduced files, as written.
struct WrittenRow {
    zone: String,
    line: String,
    u95_tvu: String,
    allowed_u95_tvu: String,
    within: bool,
}

/// The reduced rows of both demo files (`launch-a`, `launch-b`).
fn reduced_rows(out: &std::path::Path) -> Vec<WrittenRow> {
    let mut all = Vec::new();
    for name in ["launch-a.reduced.csv", "launch-b.reduced.csv"] {
        let (h, rows) = read_csv(&out.join(name));
        let c = |n: &str| h.iter().position(|x| x == n).unwrap();
        for r in rows.iter().filter(|r| r[c("status")] == "reduced") {
            let within = &r[c("within_order")];
            assert!(within == "yes" || within == "no", "{within}");
            all.push(WrittenRow {
                zone: r[c("zone")].clone(),
                line: r[c("line")].clone(),
                u95_tvu: r[c("u95_tvu_m")].clone(),
                allowed_u95_tvu: r[c("allowed_u95_tvu_m")].clone(),
                within: within == "yes",
            });
        }
    }
    all
}

/// The value of a fixed-decimal text in units of its last decimal ("0.256" → 256), exactly.
fn units(text: &str) -> u64 {
    text.replace('.', "").parse().unwrap()
}

/// The report's numbers are the rows' verdicts: for the survey, every zone and every line, the
/// chosen order's `soundings_within` is the number of reduced rows with `within_order = yes`
/// (counted here from the reduced files), and `soundings` the number of reduced rows.
#[test]
fn report_counts_are_the_rows_verdicts() {
    let (out, _) = reduce_demo(&[]);
    let report = report_of(out.path());
    let rows = reduced_rows(out.path());
    let chosen = report["chosen_order"]["name"].as_str().unwrap();
    let check = |g: &serde_json::Value, pick: &dyn Fn(&WrittenRow) -> bool| {
        let n = rows.iter().filter(|r| pick(r)).count() as u64;
        let yes = rows.iter().filter(|r| pick(r) && r.within).count() as u64;
        let order = g["orders"]
            .as_array()
            .unwrap()
            .iter()
            .find(|o| o["order"] == chosen)
            .unwrap();
        assert_eq!(g["soundings"].as_u64(), Some(n), "{}", g["id"]);
        assert_eq!(order["soundings_within"].as_u64(), Some(yes), "{}", g["id"]);
        // The share is the count's, rounded down to 0.001 (docs/outputs.md), written as that
        // short decimal.
        let share = (1000 * yes).checked_div(n).unwrap_or(0) as f64 / 1000.0;
        assert_eq!(order["share_within"].as_f64(), Some(share), "{}", g["id"]);
        assert_eq!(
            g["share_within_chosen"].as_f64(),
            Some(share),
            "{}",
            g["id"]
        );
        let text = order["share_within"].to_string();
        assert!(text.split('.').nth(1).map_or(0, str::len) <= 3, "{text}");
        n
    };
    assert_eq!(check(&report["survey"], &|_| true), rows.len() as u64);
    let mut in_zones = 0;
    for z in report["zones"].as_array().unwrap() {
        in_zones += check(z, &|r| r.zone == z["id"].as_str().unwrap());
    }
    let mut on_lines = 0;
    for l in report["lines"].as_array().unwrap() {
        on_lines += check(l, &|r| r.line == l["id"].as_str().unwrap());
    }
    assert_eq!(in_zones, rows.len() as u64);
    assert_eq!(on_lines, rows.len() as u64);
    // Every verdict is the comparison of the two values as written.
    for r in &rows {
        assert_eq!(
            r.within,
            units(&r.u95_tvu) <= units(&r.allowed_u95_tvu),
            "{} vs {}",
            r.u95_tvu,
            r.allowed_u95_tvu
        );
    }
    // The demo has rows whose two values read the same: they are within.
    assert!(rows
        .iter()
        .any(|r| r.u95_tvu == r.allowed_u95_tvu && r.within));
}

/// Nearest-rank percentile by sorting: the `⌈p·n/100⌉`-th smallest value.
fn nearest_rank(values: &mut [f64], p: usize) -> f64 {
    values.sort_by(f64::total_cmp);
    values[(p * values.len()).div_ceil(100).max(1) - 1]
}

/// The report's 95th percentiles of U95/allowed, for the survey, every zone and every line,
/// against the exact percentiles of the demo's reduced rows (the ratio of each row's two written
/// values), within the bound stated in docs/uncertainty.md#percentiles:
/// `exact ≤ sketch ≤ exact · (1 + 2⁻¹²)`, and the report rounds the sketch's value up to 0.001
/// (docs/outputs.md), so `exact ≤ reported < exact · (1 + 2⁻¹²) + 0.001`.
#[test]
fn percentiles_are_within_their_bound() {
    let (out, _) = reduce_demo(&[]);
    let report = report_of(out.path());
    let rows = reduced_rows(out.path());
    let ratio = |r: &WrittenRow| units(&r.u95_tvu) as f64 / units(&r.allowed_u95_tvu) as f64;
    let bound = 2f64.powi(-12);
    let mut checked = 0;
    let mut check = |g: &serde_json::Value, pick: &dyn Fn(&WrittenRow) -> bool| {
        let mut v: Vec<f64> = rows.iter().filter(|r| pick(r)).map(ratio).collect();
        let reported = g["p95_ratio_chosen"].as_f64().unwrap();
        if v.is_empty() {
            return;
        }
        let exact = nearest_rank(&mut v, 95);
        // serde_json reads a decimal to within a unit in its last place: 1e-12 of slack below.
        assert!(
            exact - 1e-12 <= reported && reported < exact * (1.0 + bound) + 0.001,
            "{}: exact {exact}, reported {reported}",
            g["id"]
        );
        // Three decimals, as written.
        let text = g["p95_ratio_chosen"].to_string();
        assert!(text.split('.').nth(1).map_or(0, str::len) <= 3, "{text}");
        checked += 1;
    };
    check(&report["survey"], &|_| true);
    for z in report["zones"].as_array().unwrap() {
        check(z, &|r| r.zone == z["id"].as_str().unwrap());
    }
    for l in report["lines"].as_array().unwrap() {
        check(l, &|r| r.line == l["id"].as_str().unwrap());
    }
    // The survey, 7 zones and every line with reduced soundings.
    assert!(checked > 8, "{checked}");
}

#[test]
fn per_sounding_columns_follow_their_formulas() {
    let (out, _) = reduce_demo(&[]);
    let (h, rows) = read_csv(&out.path().join("launch-a.reduced.csv"));
    let c = |n: &str| {
        h.iter()
            .position(|x| x == n)
            .unwrap_or_else(|| panic!("no column {n}"))
    };
    let f = |r: &Vec<String>, n: &str| r[c(n)].parse::<f64>().unwrap();
    let mut checked = 0;
    for r in rows.iter().filter(|r| r[c("status")] == "reduced") {
        let comps: f64 = [
            "u_tide_gauge_m",
            "u_tide_datum_m",
            "u_tide_range_m",
            "u_tide_timing_m",
            "u_tide_zone_m",
        ]
        .iter()
        .map(|n| f(r, n).powi(2))
        .sum();
        // Uncertainty columns are rounded to 1 mm: allow for the rounding of each.
        assert!((comps.sqrt() - f(r, "u_tide_m")).abs() < 1.6e-3);
        let tvu = f(r, "u_sounding_m").hypot(f(r, "u_tide_m"));
        assert!((tvu - f(r, "u_tvu_m")).abs() < 1.6e-3);
        assert!((1.96 * f(r, "u_tvu_m") - f(r, "u95_tvu_m")).abs() < 1.6e-3);
        // Special order (S-44 6.1.0): a = 0.25 m, b = 0.0075; d = reduced depth, 0 when drying.
        let d = f(r, "reduced_depth_m").max(0.0);
        assert!((0.25f64.hypot(0.0075 * d) - f(r, "allowed_u95_tvu_m")).abs() < 6e-4);
        // Sounding model of the demo project: sqrt(0.05² + (0.003 · observed depth)²).
        assert!((0.05f64.hypot(0.003 * f(r, "depth_m")) - f(r, "u_sounding_m")).abs() < 6e-4);
        // `within_order` compares the two values as written.
        let within = r[c("within_order")] == "yes";
        assert_eq!(within, f(r, "u95_tvu_m") <= f(r, "allowed_u95_tvu_m"));
        checked += 1;
    }
    assert!(checked > 40_000);
    for r in rows.iter().filter(|r| r[c("status")] != "reduced") {
        assert_eq!(r[c("u_tvu_m")], "");
        assert_eq!(r[c("within_order")], "");
    }
}

#[test]
fn html_report_has_its_plots_and_no_outside_resources() {
    let (out, _) = reduce_demo(&["--order", "1a"]);
    let html = std::fs::read_to_string(out.path().join("qa-report.html")).unwrap();
    let doc = scraper::Html::parse_document(&html);
    let sel = |s: &str| scraper::Selector::parse(s).unwrap();
    let titles: Vec<String> = doc
        .select(&sel("svg.plot > title"))
        .map(|t| t.text().collect())
        .collect();
    assert_eq!(titles.len(), 3, "{titles:?}");
    for want in [
        "Map of zones",
        "share of each component",
        "Histogram of U95",
    ] {
        assert!(
            titles.iter().any(|t| t.contains(want)),
            "missing plot '{want}': {titles:?}"
        );
    }
    let svgs: Vec<_> = doc.select(&sel("svg.plot")).collect();
    assert!(
        svgs[0].select(&sel("g.judged circle")).count() > 1000,
        "map points"
    );
    assert_eq!(
        svgs[0].select(&sel("path.zone")).count(),
        7,
        "one outline per zone"
    );
    // Each zone-boundary step's shared edge is drawn, the worst three labelled, and the depth
    // steps listed with the sign convention: reduced depth = observed depth − tide, so a step
    // tide_b − tide_a puts depth_b − depth_a = −step into the soundings (definition).
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.path().join("qa-report.json")).unwrap())
            .unwrap();
    let steps = json["boundary_steps"].as_array().unwrap();
    assert!(steps.len() >= 3, "the demo has six shared edges");
    let parts: usize = steps
        .iter()
        .map(|s| s["edge_lonlat"].as_array().unwrap().len())
        .sum();
    assert!(parts >= steps.len());
    assert_eq!(svgs[0].select(&sel("path.step-edge")).count(), parts);
    assert_eq!(svgs[0].select(&sel("text.steplabel")).count(), 3);
    let rows: Vec<String> = doc
        .select(&sel("table.boundary-depth-steps tr"))
        .skip(1)
        .map(|r| r.text().collect())
        .collect();
    assert_eq!(rows.len(), 3, "{rows:?}");
    for (s, row) in steps.iter().zip(&rows) {
        let step = s["max_step_m"].as_f64().unwrap();
        assert_eq!(s["max_depth_step_m"].as_f64().unwrap(), -step);
        let way = if step > 0.0 { "shallower" } else { "deeper" };
        let want = format!(
            "reduced from {} reads {:.3} m {way} than from {}",
            s["zone_b"].as_str().unwrap(),
            step.abs(),
            s["zone_a"].as_str().unwrap()
        );
        assert!(row.contains(&want), "{row} / {want}");
    }
    assert!(
        svgs[1].select(&sel("rect")).count() >= 8 * 6,
        "stacked bars"
    );
    assert!(svgs[2].select(&sel("rect")).count() > 5, "histogram bars");
    let axis_text: String = doc
        .select(&sel("svg text.axis"))
        .flat_map(|t| t.text())
        .collect();
    for unit in ["(degrees east", "(m)", "(%)", "Soundings"] {
        assert!(
            axis_text.contains(unit),
            "axis label with unit {unit}: {axis_text}"
        );
    }
    assert!(html.contains("qualified hydrographic review"));
    // The page shows the JSON's numbers: each zone row of the "Zones" table (the table after
    // the histogram) has the zone's share within, to 0.1 %, and its P95 ratio, to 0.001.
    let report = report_of(out.path());
    // The verdict counts every sounding of the day, and says what was judged and whose rule
    // the acceptance share is (IHO S-44 Ed. 6.1.0 applies the TVU limit per sounding; orders
    // 1a and 1b share it).
    let verdict: String = doc
        .select(&sel("div.verdict"))
        .next()
        .expect("the verdict")
        .text()
        .collect();
    let total: u64 = report["rows_by_status"]
        .as_object()
        .unwrap()
        .values()
        .map(|v| v.as_u64().unwrap())
        .sum();
    let judged = report["survey"]["soundings"].as_u64().unwrap();
    assert!(
        judged < total,
        "the demo has soundings that are not reduced"
    );
    for part in [
        format!(
            "Of the day's {total} soundings, {judged} were reduced and judged ({} not reduced",
            total - judged
        ),
        "within the limit of order 1a".to_string(),
        "the project's rule".to_string(),
        "not the standard's".to_string(),
        "judged on the TVU limit alone".to_string(),
        "orders 1a and 1b share their TVU limit".to_string(),
    ] {
        assert!(verdict.contains(&part), "{part}: {verdict}");
    }
    let within = report["survey"]["orders"]
        .as_array()
        .unwrap()
        .iter()
        .find(|o| o["order"] == "1a")
        .unwrap()["soundings_within"]
        .as_u64()
        .unwrap();
    // Rounded down to 0.1 % like every share of the report (docs/outputs.md).
    let of_all = format!(
        "{:.1} % of all soundings",
        (1000 * within / total) as f64 / 10.0
    );
    assert!(verdict.contains(&of_all), "{of_all}: {verdict}");
    let zones_table = doc
        .select(&sel("table.zones"))
        .next()
        .expect("the Zones table");
    let cells: Vec<Vec<String>> = zones_table
        .select(&sel("tbody tr"))
        .map(|tr| {
            tr.select(&sel("td"))
                .map(|td| td.text().collect())
                .collect()
        })
        .collect();
    let zones = report["zones"].as_array().unwrap();
    // A row per zone, one for the soundings in no zone; the survey's row is of headings.
    assert_eq!(cells.len(), zones.len() + 2);
    for (row, z) in cells.iter().zip(zones) {
        let id = z["id"].as_str().unwrap();
        assert_eq!(row[0].trim_end_matches(" †"), id);
        // Marked when the zone runs on a default (the demo's VW7 does).
        let defaulted = !z["defaulted_inputs"].as_array().unwrap().is_empty();
        assert_eq!(row[0].ends_with(" †"), defaulted, "{row:?}");
        assert_eq!(row[1], z["all_soundings"].to_string(), "{row:?}");
        for (k, st) in STATUSES.iter().enumerate() {
            assert_eq!(row[2 + k], z["by_status"][st].to_string(), "{row:?}");
        }
        let share = z["share_within_chosen"].as_f64().unwrap();
        assert_eq!(row[9], format!("{:.1} %", 100.0 * share), "{row:?}");
        let of_all = z["share_within_of_all"].as_f64().unwrap();
        assert_eq!(row[10], format!("{:.1} %", 100.0 * of_all), "{row:?}");
        assert_eq!(row[11], z["drying_heights"].to_string(), "{row:?}");
        let p95 = z["p95_ratio_chosen"].as_f64().unwrap();
        assert_eq!(row[13], format!("{p95:.3}"), "{row:?}");
    }
    assert!(report["zones"]
        .as_array()
        .unwrap()
        .iter()
        .any(|z| !z["defaulted_inputs"].as_array().unwrap().is_empty()));
    // Only the exports are linked (relative, beside the page); nothing is fetched.
    let hrefs: Vec<String> = doc
        .select(&sel("[href]"))
        .map(|e| e.value().attr("href").unwrap().to_string())
        .collect();
    assert_eq!(
        hrefs,
        ["failing-soundings.geojson", "unreduced-soundings.geojson"]
    );
    assert_eq!(doc.select(&sel("[src]")).count(), 0, "outside resources");
    // The one script only sorts the lines table.
    let scripts: Vec<String> = doc
        .select(&sel("script"))
        .map(|e| e.text().collect())
        .collect();
    assert_eq!(scripts.len(), 1);
    assert!(scripts[0].contains("table.sortable") && !scripts[0].contains("http"));
}

#[test]
fn without_uncertainty_there_are_no_uncertainty_columns_and_no_report() {
    let (out, err) = reduce_demo(&["--no-uncertainty"]);
    let (h, _) = read_csv(&out.path().join("launch-b.reduced.csv"));
    assert_eq!(h.last().map(String::as_str), Some("status_detail"));
    assert!(!out.path().join("qa-report.json").exists());
    assert!(err.contains("uncertainty: not computed"), "{err}");
}

#[test]
fn a_rerun_without_uncertainty_removes_the_stale_report() {
    let out = tempfile::tempdir().unwrap();
    let o = out.path().to_str().unwrap();
    let project = repo().join("zoning-demo/project.toml");
    let p = project.to_str().unwrap();
    assert_eq!(
        ebbwise(&["reduce", p, "--out", o, "--no-progress"])
            .status
            .code(),
        Some(1)
    );
    assert!(out.path().join("qa-report.html").exists());
    assert_eq!(
        ebbwise(&["reduce", p, "--out", o, "--no-progress", "--no-uncertainty"])
            .status
            .code(),
        Some(1)
    );
    assert!(!out.path().join("qa-report.html").exists());
    assert!(!out.path().join("qa-report.json").exists());
}

#[test]
fn an_order_without_uncertainty_inputs_is_refused() {
    let p = super::MiniProject::new(
        "time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n",
    );
    let o = ebbwise(&["reduce", &p.project(), "--order", "1a", "--no-progress"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("--order needs an [uncertainty] section"),
        "{}",
        stderr(&o)
    );
}

/// The report's page is rendered by `io` from data in `compute`: no file of `src/io` names the
/// `run` layer, and the report's data type lives in `compute` (docs/ARCHITECTURE.md).
#[test]
fn io_depends_on_compute_alone() {
    let mut offenders = Vec::new();
    for entry in std::fs::read_dir(repo().join("src/io")).unwrap() {
        let path = entry.unwrap().path();
        let text = std::fs::read_to_string(&path).unwrap();
        if text.contains("crate::run") || text.contains("super::super::run") {
            offenders.push(path.display().to_string());
        }
    }
    assert!(offenders.is_empty(), "io names run: {offenders:?}");
    let html = std::fs::read_to_string(repo().join("src/io/report_html.rs")).unwrap();
    assert!(html.contains("use crate::compute::qa_report::{MapMark, QaReport};"));
}

/// One row of the demo's reduced files, any status, as written.
struct AnyRow {
    file: &'static str,
    /// 1-based line in the input file (the header is line 1).
    input_line: u64,
    line: String,
    zone: String,
    status: String,
    /// Milliseconds since 1970 (rows that could be read).
    t_ms: Option<i64>,
    reduced_depth: Option<f64>,
    within: Option<bool>,
    /// u95/allowed of the written values.
    ratio: Option<f64>,
    /// u_sounding_m and the five u_tide_ components, as written.
    comps: Option<[f64; 6]>,
}

fn any_rows(out: &std::path::Path) -> Vec<AnyRow> {
    let mut all = Vec::new();
    for (name, input, time_col) in [
        ("launch-a.reduced.csv", "launch-a.csv", "time"),
        ("launch-b.reduced.csv", "launch-b.txt", "unix_s"),
    ] {
        let (h, rows) = read_csv(&out.join(name));
        let c = |n: &str| h.iter().position(|x| x == n).unwrap();
        for (i, r) in rows.iter().enumerate() {
            let status = r[c("status")].clone();
            let num = |n: &str| r[c(n)].parse::<f64>().ok();
            let t_ms = (status != "bad_input").then(|| {
                let t = &r[c(time_col)];
                match time_col {
                    "time" => chrono::DateTime::parse_from_rfc3339(t)
                        .unwrap()
                        .timestamp_millis(),
                    _ => (t.parse::<f64>().unwrap() * 1000.0).round() as i64,
                }
            });
            let judged = status == "reduced" || status == "gap_filled";
            let line = r[c("line")].trim().to_string();
            all.push(AnyRow {
                file: input,
                input_line: i as u64 + 2,
                // Both demo files have a line column: a row without a line goes on the file's
                // "(no line in …)" (docs/outputs.md).
                line: if line.is_empty() {
                    format!("(no line in {input})")
                } else {
                    line
                },
                zone: r[c("zone")].clone(),
                status,
                t_ms,
                reduced_depth: num("reduced_depth_m"),
                within: judged.then(|| r[c("within_order")] == "yes"),
                ratio: judged.then(|| {
                    units(&r[c("u95_tvu_m")]) as f64 / units(&r[c("allowed_u95_tvu_m")]) as f64
                }),
                comps: judged.then(|| {
                    [
                        "u_sounding_m",
                        "u_tide_gauge_m",
                        "u_tide_datum_m",
                        "u_tide_range_m",
                        "u_tide_timing_m",
                        "u_tide_zone_m",
                    ]
                    .map(|n| num(n).unwrap())
                }),
            });
        }
    }
    all
}

const STATUSES: [&str; 6] = [
    "reduced",
    "gap_filled",
    "outside_zoning",
    "no_gauge_data",
    "gauge_flagged",
    "bad_input",
];

/// Every count, share, drying height, worst ratio, budget in metres, line span and export of
/// the report, recomputed from the reduced files (all statuses), for the survey, every zone and
/// every line: a sounding not reduced is in the counts of its zone (when it has one) and line.
#[test]
fn every_sounding_is_in_the_report_as_the_reduced_files_have_it() {
    let (out, _) = reduce_demo(&[]);
    let report = report_of(out.path());
    let rows = any_rows(out.path());
    let mut groups_checked = 0;
    let mut check = |g: &serde_json::Value, pick: &dyn Fn(&AnyRow) -> bool| {
        let mine: Vec<&AnyRow> = rows.iter().filter(|r| pick(r)).collect();
        let id = g["id"].to_string();
        assert_eq!(g["all_soundings"].as_u64(), Some(mine.len() as u64), "{id}");
        for s in STATUSES {
            let n = mine.iter().filter(|r| r.status == s).count() as u64;
            assert_eq!(g["by_status"][s].as_u64(), Some(n), "{id} {s}");
        }
        let judged: Vec<&&AnyRow> = mine.iter().filter(|r| r.within.is_some()).collect();
        let within = judged.iter().filter(|r| r.within == Some(true)).count() as u64;
        assert_eq!(g["soundings"].as_u64(), Some(judged.len() as u64), "{id}");
        // Of all soundings, rounded down to 0.001 (docs/outputs.md).
        let of_all = if mine.is_empty() {
            0.0
        } else {
            (1000 * within / mine.len() as u64) as f64 / 1000.0
        };
        assert_eq!(g["share_within_of_all"].as_f64(), Some(of_all), "{id}");
        let drying = judged
            .iter()
            .filter(|r| r.reduced_depth.unwrap() < 0.0)
            .count() as u64;
        assert_eq!(g["drying_heights"].as_u64(), Some(drying), "{id}");
        // The largest ratio, rounded up to 0.001; the written values' ratio, so within 1e-4 of
        // the report's (computed from unrounded values) before the rounding.
        let worst = judged
            .iter()
            .map(|r| r.ratio.unwrap())
            .fold(f64::NEG_INFINITY, f64::max);
        match g["max_ratio_chosen"].as_f64() {
            Some(m) => assert!(
                m >= worst - 1e-3 && m <= worst + 1.1e-3,
                "{id}: {m} {worst}"
            ),
            None => assert!(judged.is_empty(), "{id}"),
        }
        // The budget in metres: the RMS of each written component, within the rounding of the
        // written values (0.05 mm) and of the report (0.05 mm).
        if let Some(comps) = g["budget"]["components"].as_array() {
            for (k, c) in comps.iter().enumerate() {
                if judged.is_empty() {
                    break;
                }
                let ms: f64 = judged
                    .iter()
                    .map(|r| r.comps.unwrap()[k].powi(2))
                    .sum::<f64>()
                    / judged.len() as f64;
                let rms = c["rms_m"].as_f64().unwrap();
                assert!(
                    (rms - ms.sqrt()).abs() <= 1.0e-4,
                    "{id} {}: {rms} vs {}",
                    c["component"],
                    ms.sqrt()
                );
            }
        }
        groups_checked += 1;
        mine
    };
    check(&report["survey"], &|_| true);
    let mut zone_total = 0;
    for z in report["zones"].as_array().unwrap() {
        let id = z["id"].as_str().unwrap().to_string();
        zone_total += check(z, &|r| r.zone == id).len();
    }
    // The rest are in no zone, by status.
    let no_zone: Vec<&AnyRow> = rows.iter().filter(|r| r.zone.is_empty()).collect();
    assert_eq!(zone_total + no_zone.len(), rows.len());
    for s in STATUSES {
        let n = no_zone.iter().filter(|r| r.status == s).count() as u64;
        assert_eq!(report["no_zone"][s].as_u64(), Some(n), "no zone {s}");
    }
    let mut line_total = 0;
    for l in report["lines"].as_array().unwrap() {
        let id = l["id"].as_str().unwrap().to_string();
        let mine = check(l, &|r| r.line == id);
        line_total += mine.len();
        // Its files, zones crossed and time span.
        let listed = |k: &str| -> std::collections::BTreeSet<String> {
            l[k].as_array()
                .unwrap()
                .iter()
                .map(|f| f.as_str().unwrap().to_string())
                .collect()
        };
        let files = mine.iter().map(|r| r.file.to_string()).collect();
        assert_eq!(listed("files"), files, "{id}");
        let zones = mine
            .iter()
            .filter(|r| !r.zone.is_empty())
            .map(|r| r.zone.clone())
            .collect();
        assert_eq!(listed("zones_crossed"), zones, "{id}");
        let ms = |v: &serde_json::Value| {
            chrono::DateTime::parse_from_rfc3339(v.as_str().unwrap())
                .unwrap()
                .timestamp_millis()
        };
        match mine.iter().filter_map(|r| r.t_ms).min() {
            Some(first) => {
                let last = mine.iter().filter_map(|r| r.t_ms).max().unwrap();
                assert_eq!(ms(&l["first_utc"]), first, "{id}");
                assert_eq!(ms(&l["last_utc"]), last, "{id}");
            }
            // A line of unreadable rows only has no time.
            None => assert!(l["first_utc"].is_null() && l["last_utc"].is_null(), "{id}"),
        }
    }
    assert_eq!(line_total, rows.len());
    // The demo's day has soundings of every kind the report counts.
    let s = &report["survey"];
    assert!(s["drying_heights"].as_u64().unwrap() > 0);
    for st in [
        "outside_zoning",
        "no_gauge_data",
        "gauge_flagged",
        "bad_input",
    ] {
        assert!(s["by_status"][st].as_u64().unwrap() > 0, "{st}");
    }
    assert!(groups_checked > 40, "{groups_checked}");
    // A line with nothing judged (all its soundings without gauge data) fails and is listed.
    let no_judged: Vec<&str> = report["lines"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|l| l["soundings"] == 0 && l["all_soundings"].as_u64() > Some(0))
        .map(|l| l["id"].as_str().unwrap())
        .collect();
    assert!(!no_judged.is_empty());
    for id in no_judged {
        assert!(
            report["failing_lines"]
                .as_array()
                .unwrap()
                .iter()
                .any(|f| f["id"] == id && f["soundings"] == 0),
            "{id}"
        );
    }

    // The exports: one feature per failing row and per unreduced row, each naming its file,
    // row, line and status as the reduced file has them.
    let export = |name: &str| -> Vec<serde_json::Value> {
        let v: serde_json::Value =
            serde_json::from_slice(&std::fs::read(out.path().join(name)).unwrap()).unwrap();
        assert_eq!(v["type"], "FeatureCollection");
        v["features"].as_array().unwrap().clone()
    };
    let key = |f: &serde_json::Value| {
        let p = &f["properties"];
        (
            p["file"].as_str().unwrap().to_string(),
            p["row"].as_u64().unwrap(),
            p["line"].as_str().unwrap().to_string(),
            p["status"].as_str().unwrap().to_string(),
        )
    };
    let row_key = |r: &AnyRow| {
        (
            r.file.to_string(),
            r.input_line,
            r.line.clone(),
            r.status.clone(),
        )
    };
    let failing: Vec<_> = export("failing-soundings.geojson")
        .iter()
        .map(key)
        .collect();
    let want: Vec<_> = rows
        .iter()
        .filter(|r| r.within == Some(false))
        .map(row_key)
        .collect();
    assert_eq!(failing.len(), want.len());
    assert!(
        failing == want,
        "failing export differs from the reduced files"
    );
    let unreduced_features = export("unreduced-soundings.geojson");
    let unreduced: Vec<_> = unreduced_features.iter().map(key).collect();
    let want: Vec<_> = rows
        .iter()
        .filter(|r| r.within.is_none())
        .map(row_key)
        .collect();
    assert!(
        unreduced == want,
        "unreduced export differs from the reduced files"
    );
    // Every readable one is placed (in longitude/latitude, inside the demo area); a bad row
    // with no readable position has none.
    for f in &unreduced_features {
        let g = &f["geometry"];
        if f["properties"]["status"] == "bad_input" {
            continue;
        }
        let lon = g["coordinates"][0].as_f64().unwrap();
        let lat = g["coordinates"][1].as_f64().unwrap();
        assert!(
            (-36.3..-35.8).contains(&lon) && (-47.7..-47.3).contains(&lat),
            "{lon} {lat}"
        );
    }
    assert_eq!(
        report["exports"],
        serde_json::json!(["failing-soundings.geojson", "unreduced-soundings.geojson"])
    );
}

/// The page's structure, checked against the JSON it renders: every section in order, a row
/// in each table for every zone, line, input file, failing group and status, a tide panel per
/// zone and a difference panel per gauge pair, the map's gauges and its three kinds of mark, the
/// thinning said, and a print stylesheet that keeps headings with what follows.
#[test]
fn the_page_has_every_section_and_every_row() {
    let (out, _) = reduce_demo(&[]);
    let html = std::fs::read_to_string(out.path().join("qa-report.html")).unwrap();
    let report = report_of(out.path());
    let doc = scraper::Html::parse_document(&html);
    let sel = |s: &str| scraper::Selector::parse(s).unwrap();
    let headings: Vec<String> = doc.select(&sel("h2")).map(|h| h.text().collect()).collect();
    let want = [
        "Survey orders",
        "Map: every sounding",
        "Zones",
        "Survey lines",
        "Zones and lines that fail",
        "Tide per zone",
        "Gauge differences",
        "Zone-boundary steps",
        "Uncertainty budget per zone",
        "U95 / allowed",
        "Uncertainty inputs",
        "Where the numbers came from",
    ];
    assert_eq!(headings.len(), want.len(), "{headings:?}");
    for (h, w) in headings.iter().zip(want) {
        assert!(h.starts_with(w), "{h} / {w}");
    }
    let rows = |table: &str| doc.select(&sel(&format!("{table} tbody tr"))).count();
    // Status table: six statuses and the total, which is every sounding.
    assert_eq!(rows("table.status"), 7);
    let total: u64 = report["rows_by_status"]
        .as_object()
        .unwrap()
        .values()
        .map(|v| v.as_u64().unwrap())
        .sum();
    let last: String = doc
        .select(&sel("table.status tbody tr"))
        .nth(6)
        .unwrap()
        .text()
        .collect();
    assert!(last.contains(&total.to_string()), "{last}");
    let n = |k: &str| report[k].as_array().unwrap().len();
    assert_eq!(rows("table.zones"), n("zones") + 2);
    assert_eq!(rows("table.lines"), n("lines"));
    assert_eq!(
        rows("table.failing"),
        n("failing_zones") + n("failing_lines")
    );
    assert_eq!(
        rows("table.inputs"),
        report["provenance"]["inputs"].as_array().unwrap().len()
    );
    assert_eq!(rows("table.budget"), n("zones") + 1);
    // Every input file's SHA-256 is on the page, and is the file's (computed here with the
    // sha2 crate; the soundings files' hashes are taken as the run reads them).
    for i in report["provenance"]["inputs"].as_array().unwrap() {
        let h = i["sha256"].as_str().unwrap();
        assert!(html.contains(h));
        use sha2::Digest;
        let bytes = std::fs::read(i["path"].as_str().unwrap()).unwrap();
        let want: String = sha2::Sha256::digest(&bytes)
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        assert_eq!(h, want, "{}", i["role"]);
    }
    let roles: Vec<&str> = report["provenance"]["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["role"].as_str().unwrap())
        .collect();
    for r in ["project", "zoning", "gauge record 'orlick'", "soundings"] {
        assert!(roles.contains(&r), "{r}: {roles:?}");
    }
    // The lines table is sortable and lists its lines worst first (share within of all).
    let line_shares: Vec<f64> = doc
        .select(&sel("table.lines tbody tr"))
        .map(|tr| {
            tr.select(&sel("td"))
                .nth(13)
                .unwrap()
                .value()
                .attr("data-sort")
                .unwrap()
                .parse()
                .unwrap()
        })
        .collect();
    assert!(
        line_shares.windows(2).all(|w| w[0] <= w[1]),
        "{line_shares:?}"
    );
    assert_eq!(
        doc.select(&sel("table.lines.sortable thead th")).count(),
        19
    );
    // A tide panel per zone, each with its tide line and its gauges' samples; the demo's gaps
    // are labelled and its QC-flagged samples drawn.
    let panels: Vec<_> = doc.select(&sel("figure.tide-panel")).collect();
    assert_eq!(panels.len(), n("zones"));
    for p in &panels {
        assert!(p.select(&sel("path.tide")).count() >= 1);
        assert!(p.select(&sel("circle.sample")).count() > 50);
    }
    let gap_labels: Vec<String> = doc
        .select(&sel("figure.tide-panel text.gaplabel"))
        .map(|t| t.text().collect())
        .collect();
    assert!(
        gap_labels
            .iter()
            .any(|g| g.starts_with("no tide 13:1") && g.ends_with("(gap)")),
        "{gap_labels:?}"
    );
    assert!(doc.select(&sel("figure.tide-panel path.flagged")).count() > 0);
    // A difference panel per gauge pair compared.
    let pairs = report["gauge_differences"].as_array().unwrap();
    assert!(!pairs.is_empty());
    assert_eq!(doc.select(&sel("figure.diff-panel")).count(), pairs.len());
    // The map: every gauge, a scale bar and north arrow, drying heights and unreduced soundings
    // in their own symbols, and the thinning said.
    let map = doc.select(&sel("svg.plot")).next().unwrap();
    assert_eq!(
        map.select(&sel("path.gauge")).count(),
        3 + 7,
        "3 gauges, 7 virtual"
    );
    assert_eq!(map.select(&sel("g.scalebar")).count(), 1);
    assert_eq!(map.select(&sel("g.north")).count(), 1);
    assert!(map.select(&sel("g.drying rect")).count() > 10);
    assert!(map.select(&sel("g.unreduced path")).count() > 10);
    let page: String = doc.root_element().text().collect();
    assert!(page.contains("worst U95/allowed, and, where the cell has them"));
    assert!(page.contains("so no failing, drying or unreduced sounding is hidden"));
    // The budget in metres.
    assert!(page.contains("RMS u_tvu (m)"));
    // Printing: headings kept with their content, plots and tables not split.
    let style: String = doc.select(&sel("style")).flat_map(|s| s.text()).collect();
    let print = &style[style.find("@media print").expect("a print stylesheet")..];
    assert!(print.contains("h2 {") && print.contains("break-after: avoid"));
    assert!(print.contains("break-inside: avoid"));
    assert!(page.contains("qualified hydrographic review"));
}

/// `[output] geojson_exports = false` writes no exports and removes those an earlier run left;
/// the report says it wrote none.
#[test]
fn exports_can_be_turned_off() {
    let d = tempfile::tempdir().unwrap();
    // The demo's project with its inputs' paths made absolute, in a folder of its own.
    let project = super::demo_project_with_absolute_paths()
        .replace("dir = \"out\"", "dir = \"out\"\ngeojson_exports = false");
    let p = d.path().join("project.toml");
    std::fs::write(&p, project).unwrap();
    let out = d.path().join("out");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(
        out.join("failing-soundings.geojson"),
        "left by an earlier run",
    )
    .unwrap();
    let o = ebbwise(&[
        "reduce",
        p.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--no-progress",
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("exports (GeoJSON): not written ([output] geojson_exports = false)")
    );
    assert!(!out.join("failing-soundings.geojson").exists());
    assert!(!out.join("unreduced-soundings.geojson").exists());
    let report: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("qa-report.json")).unwrap()).unwrap();
    assert_eq!(report["exports"], serde_json::json!([]));
    // No part file is left either.
    let left: Vec<_> = std::fs::read_dir(&out)
        .unwrap()
        .filter_map(Result::ok)
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(left.is_empty(), "{left:?}");
}
