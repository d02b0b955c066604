//! The table of every output column in `docs/outputs.md` against the files the commands write.
//!
//! Every command that writes a data file runs here — `reduce` (with uncertainty), `correctors`
//! (per zone, `--per-sounding`, `--per-line`), `apply`, `qc` (a project, and a lone record
//! without a datum relation), `analyse` (a committed fixture record, with and without a datum
//! relation), `predict` (from each of those constants files, and from one that does not say
//! its datum), `zones compare` (the gap-filled demo), `transfer` (the demo's short-term gauge) and `datums --high-low-waters` (the
//! fixture record, tied and not) — and each file is checked against the table: a CSV header must
//! equal the documented columns in order, every non-empty value must follow its column's
//! decimal rule,
//! every field of a JSON or TOML file whose name carries a unit must be listed and follow its
//! rule, every documented file must be written and every documented name must be used. The
//! expected values are the documentation's; the test then checks that a table with one wrong
//! rule or one wrong name is caught.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

use super::{ebbwise, repo, stderr};

/// A decimal rule of the table's `decimals` column.
#[derive(Debug, Clone, PartialEq)]
enum Rule {
    /// Exactly this many decimals in CSV; at most this many in JSON and TOML.
    Decimals(usize),
    /// ISO 8601 UTC with 3 or 6 decimals of seconds.
    Time,
    /// Digits only.
    Integer,
    /// Not checked: words, echoed inputs, the input's own columns.
    Unchecked,
}

/// One row of the table.
#[derive(Debug, Clone)]
struct Row {
    /// The file as documented (`X.reduced.csv`, `<gauge>.qc.csv`, `qc-summary.json`).
    file: String,
    /// The column (or field path) names it may have; empty for the input's own columns.
    names: Vec<String>,
    rule: Rule,
}

const TABLE_HEADER: &str = "| file | column | unit and sign | decimals | meaning |";

fn unquote(s: &str) -> String {
    s.trim().trim_matches('`').to_string()
}

/// Parses the table of every output column from `docs/outputs.md`.
fn parse_table(doc: &str) -> Vec<Row> {
    let mut lines = doc.lines().skip_while(|l| l.trim() != TABLE_HEADER);
    assert!(
        lines.next().is_some(),
        "docs/outputs.md has no line '{TABLE_HEADER}'"
    );
    let mut rows = Vec::new();
    for line in lines.skip(1).take_while(|l| l.starts_with('|')) {
        let cells: Vec<&str> = line.trim().trim_matches('|').split('|').collect();
        assert_eq!(cells.len(), 5, "a table row needs 5 cells: {line}");
        let column = cells[1].trim();
        let names = if column.starts_with("*(") {
            Vec::new()
        } else {
            column.split(" or ").map(unquote).collect()
        };
        let rule = match cells[3].trim() {
            "time" => Rule::Time,
            "integer" => Rule::Integer,
            "text" | "as given" | "as in the input" => Rule::Unchecked,
            n => Rule::Decimals(
                n.parse()
                    .unwrap_or_else(|_| panic!("unknown decimal rule '{n}' in: {line}")),
            ),
        };
        rows.push(Row {
            file: unquote(cells[0]),
            names,
            rule,
        });
    }
    assert!(rows.len() > 50, "the table has {} rows", rows.len());
    rows
}

/// The documented file a written file is an instance of: its own name, else the documented
/// pattern (`X.…`, `<…>.…`) whose suffix it ends with.
fn documented_as<'a>(name: &str, rows: &'a [Row]) -> Option<&'a str> {
    let files: BTreeSet<&str> = rows.iter().map(|r| r.file.as_str()).collect();
    if let Some(f) = files.iter().find(|f| **f == name) {
        return Some(f);
    }
    files
        .iter()
        .filter(|f| f.starts_with("X.") || f.starts_with('<'))
        .filter_map(|f| {
            let dot = f[1..].find('.').map(|i| i + 1)?;
            name.ends_with(&f[dot..]).then_some((f[dot..].len(), *f))
        })
        .max()
        .map(|(_, f)| f)
}

/// Files that the table does not list, by name, and why.
fn not_in_table(name: &str) -> Option<&'static str> {
    match name {
        "reduce-summary.json" | "apply-summary.json" => Some("counts only"),
        "qa-report.json" => Some("its schema"),
        // Checked feature by feature against the reduced files in tests/it/qa_report.rs.
        "failing-soundings.geojson" | "unreduced-soundings.geojson" => Some("GeoJSON exports"),
        _ if name.ends_with(".html") || name.ends_with(".svg") => Some("not data"),
        _ => None,
    }
}

/// A field name that carries a unit or is a time.
fn has_unit(key: &str) -> bool {
    ["_m", "_min", "_s", "_utc", "_deg", "_per_h", "_per_day"]
        .iter()
        .any(|u| key.ends_with(u))
}

fn is_time(s: &str) -> bool {
    let b = s.as_bytes();
    let digits = |r: std::ops::Range<usize>| b[r].iter().all(u8::is_ascii_digit);
    (b.len() == 24 || b.len() == 27)
        && digits(0..4)
        && b[4] == b'-'
        && b[7] == b'-'
        && b[10] == b'T'
        && b[13] == b':'
        && b[16] == b':'
        && b[19] == b'.'
        && digits(20..b.len() - 1)
        && b[b.len() - 1] == b'Z'
        && chrono::DateTime::parse_from_rfc3339(s).is_ok()
}

/// Decimals of a number as written, exponent included (`1.5e-5` has 6).
fn decimals_of(text: &str) -> usize {
    let (mantissa, exp) = match text.find(['e', 'E']) {
        Some(i) => (&text[..i], text[i + 1..].parse::<i64>().unwrap()),
        None => (text, 0),
    };
    let frac = mantissa.find('.').map_or(0, |i| mantissa.len() - i - 1) as i64;
    (frac - exp).max(0) as usize
}

/// Checks one CSV value; `None` when it follows the rule.
fn csv_value_problem(v: &str, rule: &Rule) -> Option<String> {
    if v.is_empty() {
        return None;
    }
    let ok = match rule {
        Rule::Time => is_time(v),
        Rule::Integer => v.bytes().all(|c| c.is_ascii_digit()),
        Rule::Decimals(n) => {
            let body = v.strip_prefix('-').unwrap_or(v);
            match body.split_once('.') {
                Some((a, b)) => {
                    !a.is_empty()
                        && a.bytes().all(|c| c.is_ascii_digit())
                        && b.len() == *n
                        && b.bytes().all(|c| c.is_ascii_digit())
                }
                None => false,
            }
        }
        Rule::Unchecked => true,
    };
    (!ok).then(|| format!("'{v}' does not follow {rule:?}"))
}

/// Checks one JSON or TOML value (a number or a time string); `None` when it follows the rule.
fn json_value_problem(v: &serde_json::Value, rule: &Rule) -> Option<String> {
    use serde_json::Value;
    let ok = match (rule, v) {
        (_, Value::Null) | (Rule::Unchecked, _) => true,
        (Rule::Time, Value::String(s)) => is_time(s),
        (Rule::Integer, Value::Number(n)) => n.is_u64() || n.is_i64(),
        (Rule::Decimals(d), Value::Number(n)) => decimals_of(&n.to_string()) <= *d,
        _ => false,
    };
    (!ok).then(|| format!("{v} does not follow {rule:?}"))
}

/// Every leaf of a JSON value as (path, key, value): `a.b[].c` for a key `c` in the objects of
/// an array `b`; an array of plain values gives one leaf per value under the array's path.
fn leaves(v: &serde_json::Value) -> Vec<(String, String, serde_json::Value)> {
    fn walk(
        v: &serde_json::Value,
        path: &str,
        key: &str,
        out: &mut Vec<(String, String, serde_json::Value)>,
    ) {
        use serde_json::Value;
        match v {
            Value::Object(m) => {
                for (k, x) in m {
                    let p = if path.is_empty() {
                        k.clone()
                    } else {
                        format!("{path}.{k}")
                    };
                    walk(x, &p, k, out);
                }
            }
            Value::Array(a) if a.iter().any(|x| x.is_object()) => {
                for x in a {
                    walk(x, &format!("{path}[]"), key, out);
                }
            }
            Value::Array(a) => {
                for x in a {
                    out.push((path.to_string(), key.to_string(), x.clone()));
                }
            }
            _ => out.push((path.to_string(), key.to_string(), v.clone())),
        }
    }
    let mut out = Vec::new();
    walk(v, "", "", &mut out);
    out
}

/// What the check found, and the documented names it saw used.
#[derive(Default)]
struct Checked {
    problems: Vec<String>,
    /// (documented file, name) pairs written at least once.
    used: BTreeSet<(String, String)>,
    /// Documented files written at least once.
    files: BTreeSet<String>,
}

/// The column names of the soundings file a reduced or applied file was made from.
fn input_columns(output: &Path) -> Vec<String> {
    let name = output.file_name().unwrap().to_string_lossy();
    let stem = name.split('.').next().unwrap();
    let dir = repo().join("zoning-demo/soundings");
    let input = ["csv", "txt"]
        .iter()
        .map(|e| dir.join(format!("{stem}.{e}")))
        .find(|p| p.exists())
        .unwrap_or_else(|| panic!("no input for {name}"));
    let text = std::fs::read_to_string(input).unwrap();
    text.lines()
        .next()
        .unwrap()
        .split([',', ' ', '\t', ';'])
        .filter(|s| !s.is_empty())
        .map(String::from)
        .collect()
}

fn check_csv(path: &Path, doc_file: &str, rows: &[&Row], c: &mut Checked) {
    let name = path.display();
    let (header, records) = super::read_csv(path);
    let documented: Vec<&Row> = rows
        .iter()
        .copied()
        .filter(|r| !r.names.is_empty())
        .collect();
    let n_input = if rows.iter().any(|r| r.names.is_empty()) {
        let input = input_columns(path);
        if header.len() < documented.len() || header[..header.len() - documented.len()] != input[..]
        {
            c.problems.push(format!(
                "{name}: header {header:?} is not the input's columns {input:?} followed by the {} documented ones",
                documented.len()
            ));
            return;
        }
        input.len()
    } else {
        0
    };
    if header.len() != n_input + documented.len() {
        c.problems.push(format!(
            "{name}: header {header:?} has {} columns, the table {} (+{n_input} input)",
            header.len(),
            documented.len()
        ));
        return;
    }
    for (k, r) in documented.iter().enumerate() {
        let h = &header[n_input + k];
        if r.names.contains(h) {
            c.used.insert((doc_file.to_string(), h.clone()));
        } else {
            c.problems.push(format!(
                "{name}: column {} is '{h}', the table says {:?}",
                n_input + k + 1,
                r.names
            ));
        }
    }
    for (i, rec) in records.iter().enumerate() {
        for (k, r) in documented.iter().enumerate() {
            if let Some(p) = csv_value_problem(&rec[n_input + k], &r.rule) {
                c.problems.push(format!(
                    "{name}: row {} column '{}': {p}",
                    i + 2,
                    header[n_input + k]
                ));
                if c.problems.len() > 50 {
                    return;
                }
            }
        }
    }
}

fn check_structured(path: &Path, doc_file: Option<&str>, rows: &[&Row], c: &mut Checked) {
    let name = path.display();
    let text = std::fs::read_to_string(path).unwrap();
    let value: serde_json::Value = if path.extension().is_some_and(|e| e == "toml") {
        serde_json::to_value(toml::from_str::<toml::Value>(&text).unwrap()).unwrap()
    } else {
        serde_json::from_str(&text).unwrap()
    };
    let rule_of = |p: &str| {
        rows.iter()
            .find(|r| r.names.iter().any(|n| n == p))
            .map(|r| &r.rule)
    };
    let all = leaves(&value);
    for (p, key, v) in &all {
        match rule_of(p) {
            Some(rule) => {
                if let Some(d) = doc_file {
                    c.used.insert((d.to_string(), p.clone()));
                }
                if let Some(problem) = json_value_problem(v, rule) {
                    c.problems.push(format!("{name}: {p}: {problem}"));
                }
            }
            None if has_unit(key) => c.problems.push(format!(
                "{name}: field {p} has a unit but is not in the table"
            )),
            None => {}
        }
    }
    // A documented field whose parent is null (`"step": null`) is there as "none".
    if let Some(d) = doc_file {
        for r in rows {
            for n in &r.names {
                let null_parent = all.iter().any(|(p, _, v)| {
                    v.is_null() && n.starts_with(p.as_str()) && n[p.len()..].starts_with('.')
                });
                if null_parent {
                    c.used.insert((d.to_string(), n.clone()));
                }
            }
        }
    }
}

/// Checks every file under `dir` against the table.
fn check_outputs(dir: &Path, table: &[Row]) -> Checked {
    let mut c = Checked::default();
    let mut files = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                files.push(p);
            }
        }
    }
    files.sort();
    for path in &files {
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        let structured = name.ends_with(".json") || name.ends_with(".toml");
        match (documented_as(&name, table), not_in_table(&name)) {
            (Some(doc_file), _) => {
                c.files.insert(doc_file.to_string());
                let rows: Vec<&Row> = table.iter().filter(|r| r.file == doc_file).collect();
                if structured {
                    check_structured(path, Some(doc_file), &rows, &mut c);
                } else {
                    check_csv(path, doc_file, &rows, &mut c);
                }
            }
            (None, Some("counts only")) => check_structured(path, None, &[], &mut c),
            (None, Some(_)) => {}
            (None, None) => c
                .problems
                .push(format!("{}: written but not in the table", path.display())),
        }
    }
    for r in table {
        if !c.files.contains(&r.file) {
            c.problems.push(format!(
                "{}: in the table but not written by any command",
                r.file
            ));
            continue;
        }
        for n in &r.names {
            if !c.used.contains(&(r.file.clone(), n.clone())) {
                c.problems.push(format!(
                    "{}: '{n}' is in the table but never written",
                    r.file
                ));
            }
        }
    }
    c
}

fn run_ok(args: &[&str], codes: &[i32]) {
    let o = ebbwise(args);
    assert!(
        o.status.code().is_some_and(|c| codes.contains(&c)),
        "ebbwise {args:?}: {:?}\n{}",
        o.status.code(),
        stderr(&o)
    );
}

/// Runs every command that writes a data file, into `out`.
fn write_every_output(out: &Path) {
    let demo = repo().join("zoning-demo/project.toml");
    let demo = demo.to_str().unwrap();
    let dir = |s: &str| -> String { out.join(s).to_string_lossy().into_owned() };
    // The demo's planted faults leave some soundings unreduced (exit 1); QC flags some samples.
    run_ok(
        &["reduce", demo, "--out", &dir("reduce"), "--no-progress"],
        &[1],
    );
    run_ok(
        &[
            "correctors",
            demo,
            "--out",
            &dir("correctors"),
            "--per-sounding",
            "--per-line",
        ],
        &[0],
    );
    // A continuous tide: the per-sounding files only, their sidecars with the field's inputs.
    let continuous = repo().join("zoning-demo/continuous.toml");
    run_ok(
        &[
            "correctors",
            continuous.to_str().unwrap(),
            "--out",
            &dir("correctors-continuous"),
            "--per-sounding",
        ],
        &[0],
    );
    let gap_fill = repo().join("zoning-demo/gap-fill.toml");
    // With the virtual gauges every demo zone lies inside the field's hull and agrees with it
    // (exit 0).
    run_ok(
        &[
            "zones",
            "compare",
            "--project",
            gap_fill.to_str().unwrap(),
            "--out",
            &dir("zones-compare.csv"),
        ],
        &[0],
    );
    run_ok(
        &[
            "apply",
            &dir("correctors/correctors-zones.csv"),
            "--project",
            demo,
            "--out",
            &dir("apply"),
        ],
        &[1],
    );
    run_ok(&["qc", demo, "--out", &dir("qc")], &[0, 1]);
    let record: PathBuf = repo().join("tests/fixtures/harmonics/record_29d.csv");
    let record = record.to_str().unwrap();
    let columns = ["--time-column", "time_utc", "--height-column", "height_m"];
    let with = |a: &[&str], b: &[&str]| -> Vec<String> {
        a.iter().chain(b).map(|s| s.to_string()).collect()
    };
    let run_owned = |args: Vec<String>, codes: &[i32]| {
        let a: Vec<&str> = args.iter().map(String::as_str).collect();
        run_ok(&a, codes);
    };
    // A record alone has no datum relation: its levels are above the record's zero. One row
    // written twice gives a flagged sample (`duplicate_time`) for the summary to list.
    let text = std::fs::read_to_string(record).unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    let row = lines.iter().position(|l| !l.starts_with('#')).unwrap() + 100;
    lines.insert(row + 1, lines[row]);
    let doubled = out.with_file_name("doubled.csv");
    std::fs::write(&doubled, lines.join("\n") + "\n").unwrap();
    run_owned(
        with(
            &[
                "qc",
                "--record",
                doubled.to_str().unwrap(),
                "--out",
                &dir("qc-record"),
            ],
            &columns,
        ),
        &[1],
    );
    std::fs::create_dir_all(out.join("harmonics")).unwrap();
    let h = |s: &str| dir(&format!("harmonics/{s}"));
    run_owned(
        with(
            &["analyse", record, "--out", &h("zero.constants.toml")],
            &columns,
        ),
        &[0],
    );
    run_owned(
        with(
            &[
                "analyse",
                record,
                "--zero-above-datum-m",
                "0.5",
                "--out",
                &h("datum.constants.toml"),
            ],
            &columns,
        ),
        &[0],
    );
    run_owned(
        with(
            &[
                "analyse",
                record,
                "--trend",
                "--out",
                &h("trend.constants.toml"),
            ],
            &columns,
        ),
        &[0],
    );
    // Constants that do not say their datum (a file written by hand without `levels`), outside
    // the checked folder.
    let text = std::fs::read_to_string(h("zero.constants.toml")).unwrap();
    let unstated: String = text
        .lines()
        .filter(|l| !l.starts_with("levels"))
        .map(|l| format!("{l}\n"))
        .collect();
    let hand = out.with_file_name("hand.constants.toml");
    std::fs::write(&hand, unstated).unwrap();
    // A datum transfer: the demo's short-term gauge against orlick's year, whose datums file
    // (an output of `ebbwise datums`, not in the table) is written outside the checked folder.
    let demo_dir = repo().join("zoning-demo");
    let year = demo_dir.join("gauges/orlick-year.csv");
    let control_datums = out.with_file_name("orlick-year.datums.toml");
    run_ok(
        &[
            "datums",
            year.to_str().unwrap(),
            "--zero-above-datum-m",
            "-0.85",
            "--out",
            control_datums.to_str().unwrap(),
        ],
        &[0],
    );
    run_ok(
        &[
            "transfer",
            demo_dir.join("gauges/ferrisk.csv").to_str().unwrap(),
            "--control-record",
            year.to_str().unwrap(),
            "--control-datums",
            control_datums.to_str().unwrap(),
            "--control-u-datum-m",
            "0.03",
            "--out",
            &dir("transfer/ferrisk.transfer.toml"),
        ],
        &[0],
    );
    // Observed high and low waters, tied to chart datum and not; the datums files themselves
    // outside the checked folder.
    for (stem, zero) in [("datum", Some("0.5")), ("zero", None)] {
        let datums_out = out.with_file_name(format!("{stem}.datums.toml"));
        let mut args = vec![
            "datums".to_string(),
            record.to_string(),
            "--out".into(),
            datums_out.to_string_lossy().into_owned(),
            "--high-low-waters".into(),
            h(&format!("{stem}.observed-high-low-waters.csv")),
        ];
        if let Some(z) = zero {
            args.extend(["--zero-above-datum-m".into(), z.to_string()]);
        }
        run_owned(
            with(
                &args.iter().map(String::as_str).collect::<Vec<_>>(),
                &columns,
            ),
            &[0],
        );
    }
    for (constants, stem) in [
        (h("zero.constants.toml"), "zero"),
        (h("datum.constants.toml"), "datum"),
        (hand.to_string_lossy().into_owned(), "hand"),
    ] {
        run_ok(
            &[
                "predict",
                &constants,
                "--from",
                "2026-06-14T00:00:00Z",
                "--to",
                "2026-06-16T00:00:00Z",
                "--step-min",
                "6",
                "--out",
                &h(&format!("{stem}.prediction.csv")),
                "--high-low-waters",
                &h(&format!("{stem}.high-low-waters.csv")),
            ],
            &[0],
        );
    }
}

#[test]
fn every_output_column_is_as_documented() {
    let doc = std::fs::read_to_string(repo().join("docs/outputs.md")).unwrap();
    let table = parse_table(&doc);
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("out");
    write_every_output(&out);

    let c = check_outputs(&out, &table);
    assert!(
        c.problems.is_empty(),
        "the outputs disagree with docs/outputs.md:\n{}",
        c.problems.join("\n")
    );
    let per_file: BTreeMap<&str, usize> = table.iter().fold(BTreeMap::new(), |mut m, r| {
        *m.entry(r.file.as_str()).or_default() += 1;
        m
    });
    eprintln!("checked {} documented files: {per_file:?}", per_file.len());

    // The check can fail: a table with one decimal rule changed, one column renamed, or one
    // field left out disagrees with the same files.
    let mut wrong_rule = table.clone();
    let r = wrong_rule
        .iter_mut()
        .find(|r| r.file == "correctors-zones.csv" && r.names == ["tide_m"])
        .expect("the table lists correctors-zones.csv's tide_m");
    r.rule = Rule::Decimals(3);
    let c = check_outputs(&out, &wrong_rule);
    assert!(
        c.problems
            .iter()
            .any(|p| p.contains("correctors-zones.csv: row 2 column 'tide_m'")),
        "{:?}",
        c.problems.first()
    );
    let mut wrong_name = table.clone();
    let r = wrong_name
        .iter_mut()
        .find(|r| r.file == "X.reduced.csv" && r.names == ["u_tide_m"])
        .expect("the table lists X.reduced.csv's u_tide_m");
    r.names = vec!["tide_uncertainty_m".into()];
    let c = check_outputs(&out, &wrong_name);
    assert!(
        c.problems
            .iter()
            .any(|p| p.contains("is 'u_tide_m', the table says [\"tide_uncertainty_m\"]")),
        "{:?}",
        c.problems.first()
    );
    let left_out: Vec<Row> = table
        .iter()
        .filter(|r| !(r.file == "qc-summary.json" && r.names == ["comparisons[].drift_m_per_day"]))
        .cloned()
        .collect();
    let c = check_outputs(&out, &left_out);
    assert!(
        c.problems.iter().any(|p| p
            .contains("field comparisons[].drift_m_per_day has a unit but is not in the table")),
        "{:?}",
        c.problems.first()
    );
}

#[test]
fn the_rule_checks_tell_good_values_from_bad() {
    // Hand-written examples of each rule, good and bad.
    assert_eq!(csv_value_problem("2.4807", &Rule::Decimals(4)), None);
    assert_eq!(csv_value_problem("-0.0001", &Rule::Decimals(4)), None);
    assert!(csv_value_problem("2.61", &Rule::Decimals(4)).is_some());
    assert!(csv_value_problem("2.6109999999999998", &Rule::Decimals(4)).is_some());
    assert!(csv_value_problem("nan", &Rule::Decimals(4)).is_some());
    assert_eq!(csv_value_problem("", &Rule::Decimals(4)), None);
    assert_eq!(
        csv_value_problem("2026-06-14T07:30:00.250Z", &Rule::Time),
        None
    );
    assert_eq!(
        csv_value_problem("2026-06-14T07:30:00.250001Z", &Rule::Time),
        None
    );
    assert!(csv_value_problem("2026-06-14T07:30:00Z", &Rule::Time).is_some());
    assert!(csv_value_problem("2026-06-14T07:30:00.250000+00:00", &Rule::Time).is_some());
    assert!(csv_value_problem("12a", &Rule::Integer).is_some());
    assert_eq!(decimals_of("0.0038"), 4);
    assert_eq!(decimals_of("1.5e-5"), 6);
    assert_eq!(decimals_of("6.0"), 1);
    assert_eq!(decimals_of("282"), 0);
    let n = |x: f64| serde_json::json!(x);
    assert_eq!(json_value_problem(&n(0.023), &Rule::Decimals(4)), None);
    assert!(json_value_problem(&n(0.02345), &Rule::Decimals(4)).is_some());
    assert!(has_unit("drift_m_per_day") && has_unit("created_utc") && !has_unit("weight"));
}
