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
    let report: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.path().join("qa-report.json")).unwrap()).unwrap();
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
    let report: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.path().join("qa-report.json")).unwrap()).unwrap();
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
        let share = (1000 * yes / n) as f64 / 1000.0;
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
    let report: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.path().join("qa-report.json")).unwrap()).unwrap();
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
    assert_eq!(titles.len(), 4, "{titles:?}");
    for want in [
        "Map of zones",
        "Tide above chart datum",
        "share of each component",
        "Histogram of U95",
    ] {
        assert!(
            titles.iter().any(|t| t.contains(want)),
            "missing plot '{want}': {titles:?}"
        );
    }
    let svgs: Vec<_> = doc.select(&sel("svg.plot")).collect();
    assert!(svgs[0].select(&sel("circle")).count() > 1000, "map points");
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
        svgs[1].select(&sel("path")).count() >= 14,
        "a band and a line per zone"
    );
    assert!(
        svgs[2].select(&sel("rect")).count() >= 8 * 6,
        "stacked bars"
    );
    assert!(svgs[3].select(&sel("rect")).count() > 5, "histogram bars");
    let axis_text: String = doc
        .select(&sel("svg text.axis"))
        .flat_map(|t| t.text())
        .collect();
    for unit in ["(degrees east", "(m)", "(%)", "Soundings", "(UTC)"] {
        assert!(
            axis_text.contains(unit),
            "axis label with unit {unit}: {axis_text}"
        );
    }
    assert!(html.contains("qualified hydrographic review"));
    // The page shows the JSON's numbers: each zone row of the "Zones" table (the table after
    // the histogram) has the zone's share within, to 0.1 %, and its P95 ratio, to 0.001.
    let report: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.path().join("qa-report.json")).unwrap()).unwrap();
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
    let of_all = format!(
        "{:.1} % of all soundings",
        100.0 * within as f64 / total as f64
    );
    assert!(verdict.contains(&of_all), "{of_all}: {verdict}");
    let zones_table = doc
        .select(&sel("table"))
        .find(|t| {
            t.text()
                .collect::<String>()
                .starts_with("zonesoundingswithin chosen")
        })
        .expect("the Zones table");
    let cells: Vec<Vec<String>> = zones_table
        .select(&sel("tr"))
        .skip(1)
        .map(|tr| {
            tr.select(&sel("td"))
                .map(|td| td.text().collect())
                .collect()
        })
        .collect();
    let zones = report["zones"].as_array().unwrap();
    assert_eq!(cells.len(), zones.len());
    for (row, z) in cells.iter().zip(zones) {
        assert_eq!(row[0], z["id"].as_str().unwrap());
        let share = z["share_within_chosen"].as_f64().unwrap();
        assert_eq!(row[2], format!("{:.1} %", 100.0 * share), "{row:?}");
        let p95 = z["p95_ratio_chosen"].as_f64().unwrap();
        assert_eq!(row[3], format!("{p95:.3}"), "{row:?}");
    }
    for attr in ["src", "href"] {
        let with_attr: Vec<_> = doc
            .select(&sel(&format!("[{attr}]")))
            .map(|e| format!("{:?}", e.value()))
            .collect();
        assert!(with_attr.is_empty(), "outside resources: {with_attr:?}");
    }
    assert!(!html.contains("<script"));
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
    assert!(html.contains("use crate::compute::qa_report::QaReport;"));
}
