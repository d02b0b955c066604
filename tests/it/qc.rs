//! Gauge-record quality control end to end: `ebbwise qc` on the demo and on records made here with
//! planted faults, the reducer's `gauge_flagged` status, the interpolation choice, and the
//! gauge-to-gauge comparison.
//!
//! Every expected value comes from the test's own construction (the planted faults, the generator's
//! description of the demo, or a formula named beside the check), never from the program's output.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

use super::{ebbwise, read_csv, repo, stderr, MiniProject, MINI_PROJECT};

// ---------------------------------------------------------------------------------------------
// Helpers

/// Seconds since 1970 of an RFC 3339 time.
fn ts(s: &str) -> i64 {
    chrono::DateTime::parse_from_rfc3339(s)
        .unwrap_or_else(|e| panic!("{s}: {e}"))
        .timestamp()
}

/// `2026-06-14T03:00:00Z` for a time in seconds.
fn utc(t_s: i64) -> String {
    chrono::DateTime::from_timestamp(t_s, 0)
        .unwrap()
        .format("%Y-%m-%dT%H:%M:%SZ")
        .to_string()
}

/// (time in seconds since 1970, value) pairs.
type Series = Vec<(i64, f64)>;

/// A constituent: amplitude (m), speed (°/h), phase lag (°).
type Constituent = (f64, f64, f64);

/// Speeds from the verified constituent table (shared/constituents.md), amplitudes of a
/// mesotidal semidiurnal place (invented for the test).
const M2: f64 = 28.984_104_2;
const S2: f64 = 30.0;
const N2: f64 = 28.439_729_5;
const K1: f64 = 15.041_068_6;
const O1: f64 = 13.943_035_6;

/// M2 1.2 m, S2 0.4 m, N2 0.25 m, K1 0.15 m, O1 0.1 m.
const TIDE: [Constituent; 5] = [
    (1.2, M2, 40.0),
    (0.4, S2, 75.0),
    (0.25, N2, 20.0),
    (0.15, K1, 200.0),
    (0.1, O1, 180.0),
];

/// Mean level of the made-up records above chart datum (the mini project's gauge says 2.1 m).
const Z0: f64 = 2.1;

/// Level above chart datum at `t_s` (seconds since 1970): Z0 + Σ A cos(ω t − g), t in hours
/// since 2026-06-14T00:00Z.
fn tide(t_s: f64) -> f64 {
    let h = (t_s - ts("2026-06-14T00:00:00Z") as f64) / 3600.0;
    Z0 + TIDE
        .iter()
        .map(|&(a, w, g)| a * (w * h - g).to_radians().cos())
        .sum::<f64>()
}

/// Gaussian noise N(0, sigma) from a fixed seed.
struct Noise {
    rng: rand_chacha::ChaCha8Rng,
    dist: Normal<f64>,
}

impl Noise {
    fn new(sigma_m: f64, seed: u64) -> Self {
        Noise {
            rng: rand_chacha::ChaCha8Rng::seed_from_u64(seed),
            dist: Normal::new(0.0, sigma_m).unwrap(),
        }
    }
    fn next(&mut self) -> f64 {
        self.dist.sample(&mut self.rng)
    }
}

/// A `time,height` record of `(time_s, reading)` with readings written to 3 decimals (1 mm, the
/// common resolution of a tide gauge). Returns the text and the readings as written.
fn record_csv(samples: &[(i64, f64)]) -> (String, Vec<(i64, f64)>) {
    let mut text = String::from("time,height\n");
    let mut written = Vec::new();
    for &(t, h) in samples {
        let s = format!("{h:.3}");
        text.push_str(&format!("{},{s}\n", utc(t)));
        written.push((t, s.parse().unwrap()));
    }
    (text, written)
}

/// Column `c` of row `r`.
fn col<'a>(header: &[String], row: &'a [String], c: &str) -> &'a str {
    let k = header
        .iter()
        .position(|h| h == c)
        .unwrap_or_else(|| panic!("no column {c} in {header:?}"));
    &row[k]
}

/// Reads `qc-summary.json`.
fn summary(dir: &Path) -> serde_json::Value {
    let p = dir.join("qc-summary.json");
    let text = std::fs::read_to_string(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

/// The gauge entry of a summary.
fn gauge_summary<'a>(s: &'a serde_json::Value, id: &str) -> &'a serde_json::Value {
    s["gauges"]
        .as_array()
        .unwrap()
        .iter()
        .find(|g| g["gauge"] == id)
        .unwrap_or_else(|| panic!("no gauge {id} in the summary"))
}

/// The comparison entry of a summary.
fn comparison<'a>(s: &'a serde_json::Value, pair: &str) -> &'a serde_json::Value {
    s["comparisons"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["pair"] == pair)
        .unwrap_or_else(|| panic!("no comparison {pair}: {}", s["comparisons"]))
}

/// Flags per file line of a `<gauge>.qc.csv`, only for lines with a flag.
fn flagged_lines(path: &Path) -> BTreeMap<u64, String> {
    let (h, rows) = read_csv(path);
    assert_eq!(h, ["line", "time_utc", "tide_m", "qc_flags", "qc_detail"]);
    rows.iter()
        .filter(|r| !col(&h, r, "qc_flags").is_empty())
        .map(|r| {
            (
                col(&h, r, "line").parse().unwrap(),
                col(&h, r, "qc_flags").to_string(),
            )
        })
        .collect()
}

/// Whether an SVG's tags nest properly (a small well-formedness check: every opened element is
/// closed in order, the root is `svg`, nothing follows it).
fn assert_tags_balanced(svg: &str) {
    assert!(svg.starts_with("<svg"), "{}", &svg[..svg.len().min(80)]);
    let mut stack: Vec<&str> = Vec::new();
    let mut rest = svg;
    let mut closed_root = false;
    while let Some(a) = rest.find('<') {
        assert!(!closed_root, "content after </svg>");
        let b = rest[a..].find('>').expect("unterminated tag") + a;
        let tag = &rest[a + 1..b];
        assert!(!tag.contains('<'), "'<' inside a tag: {tag}");
        if let Some(name) = tag.strip_prefix('/') {
            let open = stack
                .pop()
                .unwrap_or_else(|| panic!("</{name}> closes nothing"));
            assert_eq!(open, name.trim(), "</{name}> closes <{open}>");
            if stack.is_empty() {
                closed_root = true;
            }
        } else if !tag.ends_with('/') {
            let name = tag.split_whitespace().next().unwrap();
            stack.push(name);
        }
        rest = &rest[b + 1..];
    }
    assert!(stack.is_empty(), "unclosed: {stack:?}");
    assert!(closed_root);
    // Text outside tags must not hold a bare '&' (XML needs it escaped).
    for piece in svg.split('>') {
        let text = piece.split('<').next().unwrap_or("");
        if let Some(k) = text.find('&') {
            assert!(text[k..].contains(';'), "unescaped '&' in text: {text}");
        }
    }
}

/// Flags that do not make a sample unusable (docs/qc.md: only `gap_before`).
fn is_excluding(flag: &str) -> bool {
    flag != "gap_before"
}

// ---------------------------------------------------------------------------------------------
// 1. The demo's faulty gauge

#[test]
fn demo_qc_finds_skellans_planted_faults_and_nothing_else() {
    let root = repo().join("zoning-demo");
    let out = tempfile::tempdir().unwrap();
    let o = ebbwise(&[
        "qc",
        root.join("project.toml").to_str().unwrap(),
        "--out",
        out.path().to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));

    // What the generator planted (truth/generator.json; the skellan faults are written under
    // "pendrath_fault" by the generator — looked up at the top level too).
    let gen: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(root.join("truth/generator.json")).unwrap())
            .unwrap();
    let f = if gen["skellan_faults"].is_object() {
        &gen["skellan_faults"]
    } else {
        &gen["pendrath_fault"]["skellan_faults"]
    };
    let spike_utc = f["spike_utc"].as_str().unwrap();
    let (stuck_from, stuck_to) = (
        f["stuck_from_utc"].as_str().unwrap(),
        f["stuck_to_utc"].as_str().unwrap(),
    );
    let dup_utc = f["duplicated_time_utc"].as_str().unwrap();

    // The expected flags per file line, from reading the record ourselves (line 1 is the
    // header). Design (docs/qc.md): the first reading of a flat run stays; two rows with the
    // same time and different readings are both set aside (the demo project chooses
    // `duplicate_time_conflict = "set_both_aside"`).
    let text = std::fs::read_to_string(root.join("gauges/skellan.csv")).unwrap();
    let rows: Vec<(u64, &str, f64)> = text
        .lines()
        .enumerate()
        .skip(1)
        .map(|(i, l)| {
            let (t, h) = l.split_once(',').unwrap();
            (i as u64 + 1, t, h.parse().unwrap())
        })
        .collect();
    let mut expected = BTreeMap::new();
    let spike_rows: Vec<_> = rows.iter().filter(|r| r.1 == spike_utc).collect();
    assert_eq!(spike_rows.len(), 1);
    let spike_line = spike_rows[0].0;
    expected.insert(spike_line, "spike".to_string());
    // Independent look at the spike: well above the mean of its two neighbours (planted +0.52 m
    // on a tide changing by a few cm per 6 min).
    let k = rows.iter().position(|r| r.0 == spike_line).unwrap();
    let bump = rows[k].2 - 0.5 * (rows[k - 1].2 + rows[k + 1].2);
    assert!(bump > 0.4, "{bump}");
    let stuck: Vec<_> = rows
        .iter()
        .filter(|r| r.1 >= stuck_from && r.1 <= stuck_to)
        .collect();
    assert!(stuck.len() >= 5);
    assert!(
        stuck.iter().all(|r| r.2 == stuck[0].2),
        "the stuck rows repeat one reading"
    );
    for r in &stuck[1..] {
        expected.insert(r.0, "flat_line".to_string());
    }
    let dups: Vec<_> = rows.iter().filter(|r| r.1 == dup_utc).collect();
    assert_eq!(dups.len(), 2);
    assert_ne!(dups[0].2, dups[1].2, "the two readings differ");
    expected.insert(dups[0].0, "duplicate_time".to_string());
    expected.insert(dups[1].0, "duplicate_time".to_string());

    let skellan_csv = out.path().join("skellan.qc.csv");
    assert_eq!(flagged_lines(&skellan_csv), expected);

    // The level column is the reading plus the gauge zero (+0.35 m in the project file).
    let (h, qc_rows) = read_csv(&skellan_csv);
    assert_eq!(qc_rows.len(), rows.len(), "every sample, in file order");
    let spike_row = qc_rows
        .iter()
        .find(|r| col(&h, r, "line") == spike_line.to_string())
        .unwrap();
    let level: f64 = col(&h, spike_row, "tide_m").parse().unwrap();
    assert!((level - (rows[k].2 + 0.35)).abs() < 1e-4, "{level}");
    assert_eq!(ts(col(&h, spike_row, "time_utc")), ts(spike_utc));
    assert!(
        col(&h, spike_row, "qc_detail").starts_with("spike: "),
        "{}",
        col(&h, spike_row, "qc_detail")
    );

    // The other gauges: nothing that excludes a sample (gap_before is informational).
    for g in ["orlick", "pendrath"] {
        for (line, flags) in flagged_lines(&out.path().join(format!("{g}.qc.csv"))) {
            // Rows without a reading are listed as `no_reading`; they are not samples.
            if flags == "no_reading" {
                continue;
            }
            assert!(
                !flags.split(';').any(is_excluding),
                "{g} line {line}: {flags}"
            );
        }
    }

    // The summary's counts equal the flags counted in each CSV.
    let s = summary(out.path());
    assert_eq!(s["schema"], "ebbwise-qc-summary/2");
    for g in ["orlick", "pendrath", "skellan"] {
        let (h, rows) = read_csv(&out.path().join(format!("{g}.qc.csv")));
        let mut counts: BTreeMap<String, u64> = BTreeMap::new();
        let mut usable = 0;
        // Rows without a reading (`no_reading`, empty level) are listed but are not samples.
        let rows: Vec<_> = rows
            .into_iter()
            .filter(|r| col(&h, r, "qc_flags") != "no_reading")
            .collect();
        let no_reading = gauge_summary(&s, g)["rows_without_reading"]
            .as_u64()
            .unwrap();
        for r in &rows {
            let flags = col(&h, r, "qc_flags");
            let words: Vec<&str> = flags.split(';').filter(|w| !w.is_empty()).collect();
            if !words.iter().any(|w| is_excluding(w)) {
                usable += 1;
            }
            for w in words {
                *counts.entry(w.to_string()).or_default() += 1;
            }
        }
        let gs = gauge_summary(&s, g);
        assert_eq!(gs["samples"], rows.len() as u64, "{g}");
        assert_eq!(no_reading, if g == "pendrath" { 2 } else { 0 }, "{g}");
        assert_eq!(gs["usable"], usable, "{g}");
        let listed = gs["flags"].as_object().unwrap();
        assert_eq!(listed.len(), 9, "every flag listed: {listed:?}");
        for (flag, n) in listed {
            assert_eq!(
                n.as_u64().unwrap(),
                counts.get(flag).copied().unwrap_or(0),
                "{g} {flag}"
            );
        }
        for flag in counts.keys() {
            assert!(listed.contains_key(flag), "{g}: {flag} not in the summary");
        }
    }
    let sk = gauge_summary(&s, "skellan");
    assert_eq!(sk["flags"]["spike"], 1);
    assert_eq!(sk["flags"]["flat_line"], (stuck.len() - 1) as u64);
    assert_eq!(sk["flags"]["duplicate_time"], 2);
    let first = &sk["first_flagged"][0];
    assert_eq!(
        (first["line"].as_u64(), first["flag"].as_str()),
        (Some(spike_line), Some("spike"))
    );

    // The plot: tags nest, legend entries with the counts of the CSV.
    let svg = std::fs::read_to_string(out.path().join("skellan.qc.svg")).unwrap();
    assert_tags_balanced(&svg);
    for (flag, n) in [
        ("spike", 1),
        ("flat_line", stuck.len() - 1),
        ("duplicate_time", 2),
        ("level_shift", 0),
    ] {
        let entry = format!(">{flag} ({n})</text>");
        assert!(svg.contains(&entry), "legend lacks {entry}");
    }

    // VW3 is fed by orlick and pendrath together (README): the two carried to it agree.
    let c = comparison(&s, "pendrath-orlick@VW3");
    assert_eq!(c["flagged"], false, "{c}");
    assert!(c["findings"].as_array().unwrap().is_empty(), "{c}");
    assert!(c["n"].as_u64().unwrap() > 1000, "{c}");
    let (dh, drows) = read_csv(&out.path().join("gauge-differences.csv"));
    let n_pair = drows
        .iter()
        .filter(|r| col(&dh, r, "pair") == "pendrath-orlick@VW3")
        .count();
    assert_eq!(n_pair as u64, c["n"].as_u64().unwrap());
}

// ---------------------------------------------------------------------------------------------
// 2. The reducer does not interpolate across flagged samples

/// Six-minute record 00:00–12:00 on 2026-06-14 of `tide` + 5 mm noise (a sheltered gauge; common
/// practice), readings above a gauge zero 1.0 m above chart datum (the mini project's), with a
/// spike of +0.5 m at 03:00 and a level shift of +0.25 m from 08:00 on.
///
/// Why 0.25 m: the 12-hour record is short (only ~70 junctions have full 120-min windows), so
/// the robust σ of the level-shift statistic is poorly determined; a step well above the default
/// limit (8 robust σ, at least 0.05 m) keeps the test about the reducer, not about detection
/// limits (those are tested in `compute::qc`).
fn faulty_record() -> (String, Vec<(i64, f64)>) {
    let t0 = ts("2026-06-14T00:00:00Z");
    let mut noise = Noise::new(0.005, 61);
    let samples: Vec<(i64, f64)> = (0..=120)
        .map(|i| {
            let t = t0 + i * 360;
            let mut h = tide(t as f64) - 1.0 + noise.next();
            if t == ts("2026-06-14T03:00:00Z") {
                h += 0.5;
            }
            if t >= ts("2026-06-14T08:00:00Z") {
                h += 0.25;
            }
            (t, h)
        })
        .collect();
    record_csv(&samples)
}

/// Each sounding: (time, lon, status it must get with QC on, time of the flagged sample its
/// detail must name). Z1 (lon 10.005) has time corrector 0, Z2 (lon 10.015) +6 min, so Z2's tide
/// at t is the gauge's at t − 6 min. A sounding is `gauge_flagged` exactly when its gauge time
/// lies strictly between the samples around a flagged one: (02:54, 03:06) for the spike at 03:00;
/// after 07:54 for the step at 08:00, since a level shift sets aside the record after it (to the
/// record's end here) until the level is confirmed.
const FAULT_SOUNDINGS: [(&str, f64, &str, Option<&str>); 15] = [
    ("2026-06-14T01:00:00Z", 10.005, "reduced", None),
    ("2026-06-14T02:54:00Z", 10.005, "reduced", None),
    (
        "2026-06-14T02:55:00Z",
        10.005,
        "gauge_flagged",
        Some("03:00"),
    ),
    (
        "2026-06-14T03:00:00Z",
        10.005,
        "gauge_flagged",
        Some("03:00"),
    ),
    (
        "2026-06-14T03:05:30Z",
        10.005,
        "gauge_flagged",
        Some("03:00"),
    ),
    ("2026-06-14T03:06:00Z", 10.005, "reduced", None),
    ("2026-06-14T03:30:00Z", 10.005, "reduced", None),
    ("2026-06-14T07:54:00Z", 10.005, "reduced", None),
    (
        "2026-06-14T07:57:00Z",
        10.005,
        "gauge_flagged",
        Some("08:00"),
    ),
    (
        "2026-06-14T08:03:00Z",
        10.005,
        "gauge_flagged",
        Some("08:00"),
    ),
    (
        "2026-06-14T08:06:00Z",
        10.005,
        "gauge_flagged",
        Some("08:00"),
    ),
    (
        "2026-06-14T10:00:00Z",
        10.005,
        "gauge_flagged",
        Some("08:00"),
    ),
    ("2026-06-14T02:59:00Z", 10.015, "reduced", None),
    (
        "2026-06-14T03:09:00Z",
        10.015,
        "gauge_flagged",
        Some("03:00"),
    ),
    ("2026-06-14T03:12:00Z", 10.015, "reduced", None),
];

/// Linear interpolation in a written record at gauge time `t` (seconds), level above datum.
fn linear_level(rec: &[(i64, f64)], zero: f64, t: f64) -> f64 {
    let k = rec.iter().rposition(|&(ti, _)| ti as f64 <= t).unwrap();
    if rec[k].0 as f64 == t {
        return rec[k].1 + zero;
    }
    let (ta, ha) = rec[k];
    let (tb, hb) = rec[k + 1];
    ha + zero + (hb - ha) * (t - ta as f64) / (tb - ta) as f64
}

fn fault_project(qc_enabled: bool) -> (MiniProject, Vec<(i64, f64)>) {
    let mut s = String::from("time,lon,lat,depth,line\n");
    for (t, lon, _, _) in FAULT_SOUNDINGS {
        s.push_str(&format!("{t},{lon},50.005,15.0,L1\n"));
    }
    let p = MiniProject::new(&s);
    let (text, rec) = faulty_record();
    p.write("g1.csv", &text);
    if !qc_enabled {
        p.write(
            "project.toml",
            &format!("{MINI_PROJECT}\n[qc]\nenabled = false\n"),
        );
    }
    (p, rec)
}

#[test]
fn reducer_marks_soundings_across_flagged_samples_and_only_those() {
    let (p, rec) = fault_project(true);

    // The planted faults are what QC finds in this record (sample lines: header is line 1,
    // sample i is line i + 2; 03:00 is sample 30, 08:00 sample 80).
    let qc_out = p.path("qc");
    let o = ebbwise(&["qc", &p.project(), "--out", qc_out.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let flagged = flagged_lines(&qc_out.join("g1.qc.csv"));
    let mut want = BTreeMap::from([(32, "spike".to_string())]);
    for line in 82..=122 {
        want.insert(line, "level_shift".to_string());
    }
    assert_eq!(
        flagged, want,
        "only the planted spike and the step (with the record after it), no false alarm on 5 mm noise"
    );

    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(
        o.status.code(),
        Some(1),
        "not every sounding reduced: {}",
        stderr(&o)
    );
    let (h, rows) = read_csv(&p.path("out/s.reduced.csv"));
    assert_eq!(rows.len(), FAULT_SOUNDINGS.len());
    for (r, (t, lon, status, at)) in rows.iter().zip(FAULT_SOUNDINGS) {
        let detail = col(&h, r, "status_detail");
        assert_eq!(col(&h, r, "status"), status, "{t} lon {lon}: {detail}");
        match at {
            Some(hhmm) => {
                let sample = format!("the gauge sample at 2026-06-14T{hhmm}:00Z was flagged");
                assert!(detail.contains(&sample), "{t}: {detail}");
                // The time asked of the gauge is the sounding's minus the zone's corrector.
                let dt = if lon > 10.01 { 360 } else { 0 };
                let asked = format!("no level at {}", utc(ts(t) - dt));
                assert!(detail.contains(&asked), "{t}: {detail}");
                assert_eq!(col(&h, r, "tide_m"), "", "{t}");
            }
            None => {
                // Z1 tide is the gauge level (Δt 0, R 1, scaled form); Z2 is
                // 1.5 + 0.5 (level(t − 6 min) − 2.1) (zone-mean form of the mini zoning).
                let tide: f64 = col(&h, r, "tide_m").parse().unwrap();
                let want = if lon > 10.01 {
                    1.5 + 0.5 * (linear_level(&rec, 1.0, (ts(t) - 360) as f64) - 2.1)
                } else {
                    linear_level(&rec, 1.0, ts(t) as f64)
                };
                assert!((tide - want).abs() < 1e-4, "{t}: {tide} vs {want}");
            }
        }
    }

    // With QC off, the same soundings are reduced, through the raw samples: at 03:00 the tide
    // is the spike's level itself.
    let (p, rec) = fault_project(false);
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let (h, rows) = read_csv(&p.path("out/s.reduced.csv"));
    for (r, (t, lon, _, _)) in rows.iter().zip(FAULT_SOUNDINGS) {
        assert_eq!(col(&h, r, "status"), "reduced", "{t}");
        if lon < 10.01 {
            let tide: f64 = col(&h, r, "tide_m").parse().unwrap();
            let want = linear_level(&rec, 1.0, ts(t) as f64);
            assert!((tide - want).abs() < 1e-4, "{t}: {tide} vs {want}");
        }
    }
    let spike = rec
        .iter()
        .find(|r| r.0 == ts("2026-06-14T03:00:00Z"))
        .unwrap();
    let tide_0300: f64 = col(&h, &rows[3], "tide_m").parse().unwrap();
    assert!((tide_0300 - (spike.1 + 1.0)).abs() < 1e-4);
}

#[test]
fn per_zone_correctors_mark_flagged_times() {
    let (p, _) = fault_project(true);
    let out = p.path("corr");
    let o = ebbwise(&[
        "correctors",
        &p.project(),
        "--out",
        out.to_str().unwrap(),
        "--step-min",
        "1",
        "--from",
        "2026-06-14T02:50:00Z",
        "--to",
        "2026-06-14T03:15:00Z",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let (h, rows) = read_csv(&out.join("correctors-zones.csv"));
    let mut seen = 0;
    for r in &rows {
        let zone = col(&h, r, "zone");
        let t = ts(col(&h, r, "time_utc"));
        // Gauge time: minus the zone's time corrector (Z1 0, Z2 +6 min).
        let g = t - if zone == "Z2" { 360 } else { 0 };
        let (lo, hi) = (ts("2026-06-14T02:54:00Z"), ts("2026-06-14T03:06:00Z"));
        let want = if g > lo && g < hi {
            "flagged"
        } else if (g - ts("2026-06-14T00:00:00Z")) % 360 == 0 {
            "observed"
        } else {
            "interpolated"
        };
        assert_eq!(col(&h, r, "status"), want, "{zone} {}", utc(t));
        assert_eq!(
            col(&h, r, "tide_m").is_empty(),
            want == "flagged",
            "{zone} {}",
            utc(t)
        );
        seen += 1;
    }
    // Two zones, 26 one-minute times each.
    assert_eq!(seen, 2 * 26);
}

// ---------------------------------------------------------------------------------------------
// 3. Interpolation choice

/// Worst linear-interpolation error for a sum of constituents sampled every `dt_h` hours:
/// Σ A (ωΔt)²/8 (Taylor remainder of linear interpolation; DOMAIN §3).
fn linear_bound(dt_h: f64) -> f64 {
    TIDE.iter()
        .map(|&(a, w, _)| a * (w.to_radians() * dt_h).powi(2) / 8.0)
        .sum()
}

/// Interior error bound of a cubic spline: Σ (5/384) A (ωΔt)⁴ (Hall & Meyer 1976, from memory;
/// the fourth derivative of a sum is bounded by Σ A ω⁴).
fn spline_bound(dt_h: f64) -> f64 {
    TIDE.iter()
        .map(|&(a, w, _)| 5.0 / 384.0 * a * (w.to_radians() * dt_h).powi(4))
        .sum()
}

/// Reduces soundings at half-hours of 2026-06-14 and -15 against an hourly record from
/// 2026-06-13T00Z to 2026-06-17T00Z, with the gauge's `interpolation` set to `choice`. Returns
/// (sounding time, tide_m) and the record as written.
fn hourly_run(choice: &str) -> (Series, Series) {
    let t_rec = ts("2026-06-13T00:00:00Z");
    // Readings to 6 decimals: rounding (5e-7 m) is far below the errors compared here.
    let mut text = String::from("time,height\n");
    let mut rec = Vec::new();
    for i in 0..=96 {
        let t = t_rec + i * 3600;
        let s = format!("{:.6}", tide(t as f64) - 1.0);
        text.push_str(&format!("{},{s}\n", utc(t)));
        rec.push((t, s.parse::<f64>().unwrap()));
    }
    let t_snd = ts("2026-06-14T00:30:00Z");
    let times: Vec<i64> = (0..48).map(|i| t_snd + i * 3600).collect();
    let mut snd = String::from("time,lon,lat,depth,line\n");
    for &t in &times {
        snd.push_str(&format!("{},10.005,50.005,20.0,L1\n", utc(t)));
    }
    let p = MiniProject::new(&snd);
    p.write("g1.csv", &text);
    // Hourly samples: the maximum gap must exceed 60 min (90 here).
    let project = MINI_PROJECT.replace(
        "max_gap_min = 30",
        &format!("max_gap_min = 90\ninterpolation = \"{choice}\""),
    );
    assert_ne!(project, MINI_PROJECT);
    p.write("project.toml", &project);
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(o.status.code(), Some(0), "{choice}: {}", stderr(&o));
    let (h, rows) = read_csv(&p.path("out/s.reduced.csv"));
    assert_eq!(rows.len(), times.len());
    let tides = rows
        .iter()
        .zip(&times)
        .map(|(r, &t)| {
            assert_eq!(col(&h, r, "status"), "reduced", "{choice} {}", utc(t));
            let tide: f64 = col(&h, r, "tide_m").parse().unwrap();
            let red: f64 = col(&h, r, "reduced_depth_m").parse().unwrap();
            // Reduced depth = observed depth − tide (4-decimal columns).
            assert!((red - (20.0 - tide)).abs() < 2e-4, "{red} {tide}");
            (t, tide)
        })
        .collect();
    (tides, rec)
}

#[test]
fn cubic_beats_linear_on_hourly_constituents_through_the_reducer() {
    let (lin, rec) = hourly_run("linear");
    let (cub, _) = hourly_run("cubic");
    let (auto, _) = hourly_run("auto");
    let err = |v: &[(i64, f64)]| -> (f64, f64) {
        let e: Vec<f64> = v.iter().map(|&(t, x)| x - tide(t as f64)).collect();
        let max = e.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let rms = (e.iter().map(|x| x * x).sum::<f64>() / e.len() as f64).sqrt();
        (max, rms)
    };
    let (lin_max, lin_rms) = err(&lin);
    let (cub_max, cub_rms) = err(&cub);
    let (lb, sb) = (linear_bound(1.0), spline_bound(1.0));
    eprintln!(
        "hourly record, half-hour soundings: linear max {:.2} mm rms {:.2} mm (bound {:.2} mm); \
         cubic max {:.3} mm rms {:.3} mm (bound {:.3} mm)",
        lin_max * 1e3,
        lin_rms * 1e3,
        lb * 1e3,
        cub_max * 1e3,
        cub_rms * 1e3,
        sb * 1e3
    );
    // Output is written to 4 decimals: allow 1e-4 m over each bound for rounding.
    assert!(lin_max <= lb + 1e-4, "{lin_max} > {lb}");
    assert!(cub_max <= sb + 1e-4, "{cub_max} > {sb}");
    // "linear" is linear: at a half-hour the interpolant is the mean of the two readings around
    // it (definition), so the tide equals that mean to the output's rounding.
    for &(t, x) in &lin {
        let want = linear_level(&rec, 1.0, t as f64);
        assert!((x - want).abs() < 1e-4, "{}: {x} vs {want}", utc(t));
    }
    // At mid-interval a constituent's linear error is A cos(phase) (1 − cos(ωΔt/2)). Some
    // half-hour lies within 15 min of an M2 crest (cos 7.3° ≈ 0.99), where M2 alone gives
    // ≈ 1.2 m × (1 − cos 14.5°) ≈ 38 mm and the others at most −23 mm (their bounds): the largest
    // error is at least ≈ 15 mm, a quarter of the bound; ask for a fifth.
    assert!(lin_max > 0.2 * lb, "{lin_max} vs bound {lb}");
    // The spline is far better: its bound is 38× smaller here; ask for 10×.
    assert!(cub_max * 10.0 < lin_max, "{cub_max} vs {lin_max}");
    assert!(cub_rms * 10.0 < lin_rms, "{cub_rms} vs {lin_rms}");
    // auto: 60-min steps exceed the default 10-min threshold, so the spline is used.
    assert_eq!(auto, cub);
}

// ---------------------------------------------------------------------------------------------
// 4. Comparing two gauges that feed one zone

/// Two gauges outside the zone, both seeing the tide of `tide` (same place for the test), feeding
/// zone Z together with weights 0.5/0.5, time corrector 0, range ratio 1, zone-mean form with zone
/// mean 2.1 m (= both gauges' mean level). g1's zero is 1.0 m above chart datum, g2's 0.5 m below.
/// Three days at 6 min with 5 mm noise (realistic for a sheltered gauge; common practice).
/// `g2_fault(stamp_s) -> level above datum` writes g2's record.
fn two_gauge_project(g2_level: impl Fn(f64) -> f64) -> MiniProject {
    let p =
        MiniProject::new("time,lon,lat,depth,line\n2026-06-14T12:00:00Z,10.005,50.005,10.0,L1\n");
    let t0 = ts("2026-06-13T00:00:00Z");
    let stamps: Vec<i64> = (0..=720).map(|i| t0 + i * 360).collect();
    let mut n1 = Noise::new(0.005, 41);
    let mut n2 = Noise::new(0.005, 42);
    let g1: Vec<(i64, f64)> = stamps
        .iter()
        .map(|&t| (t, tide(t as f64) - 1.0 + n1.next()))
        .collect();
    let g2: Vec<(i64, f64)> = stamps
        .iter()
        .map(|&t| (t, g2_level(t as f64) + 0.5 + n2.next()))
        .collect();
    p.write("g1.csv", &record_csv(&g1).0);
    p.write("g2.csv", &record_csv(&g2).0);
    p.write(
        "project.toml",
        r#"
name = "two gauges"
zoning = "zoning.geojson"
[output]
dir = "out"
[[gauge]]
id = "g1"
lon = 9.99
lat = 49.99
record = "g1.csv"
units = "m"
zero_above_datum_m = 1.0
mean_level_above_datum_m = 2.1
[[gauge]]
id = "g2"
lon = 9.995
lat = 49.99
record = "g2.csv"
units = "m"
zero_above_datum_m = -0.5
mean_level_above_datum_m = 2.1
[[soundings]]
files = ["s.csv"]
crs = "EPSG:4326"
columns = { time = "time", x = "lon", y = "lat", depth = "depth", line = "line" }
"#,
    );
    p.write(
        "zoning.geojson",
        r#"{"type":"FeatureCollection","features":[
{"type":"Feature","properties":{"zone":"Z","mean_level_above_datum_m":2.1,"feeds":[
  {"gauge":"g1","weight":0.5,"time_corrector_min":0,"range_ratio":1.0},
  {"gauge":"g2","weight":0.5,"time_corrector_min":0,"range_ratio":1.0}]},
 "geometry":{"type":"Polygon","coordinates":[[[10.0,50.0],[10.01,50.0],[10.01,50.01],[10.0,50.01],[10.0,50.0]]]}}
]}"#,
    );
    p
}

/// Runs `ebbwise qc` and returns (exit code, the g2–g1 comparison through Z).
fn compare_run(p: &MiniProject) -> (Option<i32>, serde_json::Value) {
    let out = p.path("qc");
    let o = ebbwise(&["qc", &p.project(), "--out", out.to_str().unwrap()]);
    let s = summary(&out);
    // Neither record has a fault QC should see.
    for g in ["g1", "g2"] {
        let gs = gauge_summary(&s, g);
        assert_eq!(gs["usable"], gs["samples"], "{g}: {}", gs["first_flagged"]);
    }
    // The zone's feeds are g1 then g2; the pair is named second-first and its difference is
    // a − b = (g2 carried to Z) − (g1 carried to Z).
    let c = comparison(&s, "g2-g1@Z").clone();
    assert_eq!(c["a"], "g2 carried to zone Z");
    assert_eq!(c["b"], "g1 carried to zone Z");
    assert_eq!(s["comparisons"].as_array().unwrap().len(), 1);
    (o.status.code(), c)
}

fn num(c: &serde_json::Value, k: &str) -> f64 {
    c[k].as_f64()
        .unwrap_or_else(|| panic!("{k} missing in {c}"))
}

#[test]
fn consistent_gauges_compare_clean() {
    let (code, c) = compare_run(&two_gauge_project(tide));
    assert_eq!(code, Some(0), "{c}");
    assert_eq!(c["flagged"], false, "{c}");
    // Same tide, independent 5 mm noise on each: the difference has σ ≈ 7 mm and mean ≈ 0
    // (σ/√721 ≈ 0.3 mm).
    assert!(num(&c, "mean_m").abs() < 0.002, "{c}");
    assert!(num(&c, "std_m") < 0.012, "{c}");
    assert!(num(&c, "best_lag_min").abs() < 1.0, "{c}");
}

#[test]
fn a_clock_error_shows_as_a_lag_of_the_right_sign() {
    // g2's logger clock runs 40 min fast: the reading taken at true time τ is stamped τ + 40 min,
    // so the sample stamped s holds the tide of s − 40 min. Then a(s) = T(s − 40 min), and b
    // shifted by the extra time corrector L is T(s − L): they agree best at L = +40 min.
    let (code, c) = compare_run(&two_gauge_project(|t| tide(t - 2400.0)));
    assert_eq!(code, Some(1), "{c}");
    assert_eq!(c["flagged"], true, "{c}");
    let lag = num(&c, "best_lag_min");
    eprintln!("40-min clock error: best lag {lag:+.2} min, {c}");
    assert!((lag - 40.0).abs() < 1.0, "{c}");
    assert!(
        c["findings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|f| f.as_str().unwrap().contains("clocks")),
        "{c}"
    );
    // At the best lag only the noise remains (σ ≈ 7 mm), far below the unaligned σ (a 40-min
    // shift of a 1.2 m M2 alone gives 2·1.2·sin(ω·20 min) ≈ 0.40 m amplitude).
    assert!(num(&c, "std_at_best_lag_m") < 0.2 * num(&c, "std_m"), "{c}");
    // A pure shift moves the mean by at most 2τ·max|T − Z0| / L = 2 · 40 min · 2.1 m / 72 h
    // ≈ 0.039 m (the ends of the record), so no datum finding.
    assert!(num(&c, "mean_m").abs() < 0.045, "{c}");
}

#[test]
fn a_datum_error_shows_in_the_mean_difference() {
    // g2's zero is really 0.65 m below chart datum but the project says 0.5: its levels come out
    // 0.15 m high, so a − b = (g2 carried) − (g1 carried) ≈ +0.15 m.
    let (code, c) = compare_run(&two_gauge_project(|t| tide(t) + 0.15));
    assert_eq!(code, Some(1), "{c}");
    assert_eq!(c["flagged"], true, "{c}");
    eprintln!("0.15 m datum error: {c}");
    assert!((num(&c, "mean_m") - 0.15).abs() < 0.003, "{c}");
    let findings: Vec<&str> = c["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f.as_str().unwrap())
        .collect();
    assert_eq!(findings.len(), 1, "only the datum: {findings:?}");
    assert!(findings[0].contains("mean difference"), "{findings:?}");
    assert!(num(&c, "best_lag_min").abs() < 1.0, "{c}");
}

// ---------------------------------------------------------------------------------------------
// 5. One record outside a project

#[test]
fn single_record_qc_finds_the_spike_and_leaves_the_input_alone() {
    let dir = tempfile::tempdir().unwrap();
    let t0 = ts("2026-06-14T00:00:00Z");
    let mut noise = Noise::new(0.005, 5);
    // Readings above a zero 1.5 m above chart datum; spike of +0.4 m at sample 50 (line 52).
    let samples: Vec<(i64, f64)> = (0..=120)
        .map(|i| {
            let t = t0 + i * 360;
            let spike = if i == 50 { 0.4 } else { 0.0 };
            (t, tide(t as f64) - 1.5 + noise.next() + spike)
        })
        .collect();
    let (text, rec) = record_csv(&samples);
    let input = dir.path().join("rec.csv");
    std::fs::write(&input, &text).unwrap();
    let listing = |d: &Path| -> BTreeSet<String> {
        std::fs::read_dir(d)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect()
    };

    for out in [dir.path().join("qc-out"), dir.path().to_path_buf()] {
        let before = listing(dir.path());
        let o = ebbwise(&[
            "qc",
            "--record",
            input.to_str().unwrap(),
            "--zero-above-datum-m",
            "1.5",
            "--out",
            out.to_str().unwrap(),
        ]);
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        // Inputs are never overwritten.
        assert_eq!(std::fs::read_to_string(&input).unwrap(), text);
        for f in ["rec.qc.csv", "rec.qc.svg", "qc-summary.json"] {
            assert!(out.join(f).is_file(), "{f} in {}", out.display());
        }
        assert_eq!(
            flagged_lines(&out.join("rec.qc.csv")),
            BTreeMap::from([(52, "spike".to_string())])
        );
        let (h, rows) = read_csv(&out.join("rec.qc.csv"));
        let spike_level: f64 = col(&h, &rows[50], "tide_m").parse().unwrap();
        assert!(
            (spike_level - (rec[50].1 + 1.5)).abs() < 1e-4,
            "{spike_level}"
        );
        let s = summary(&out);
        assert_eq!(gauge_summary(&s, "rec")["flags"]["spike"], 1);
        assert!(s["comparisons"].as_array().unwrap().is_empty());
        assert_tags_balanced(&std::fs::read_to_string(out.join("rec.qc.svg")).unwrap());
        // Nothing else appeared beside the input (other than the requested output folder).
        let after = listing(dir.path());
        let new: BTreeSet<_> = after.difference(&before).cloned().collect();
        let allowed: BTreeSet<String> = if out == dir.path() {
            ["rec.qc.csv", "rec.qc.svg", "qc-summary.json"]
                .map(String::from)
                .into()
        } else {
            ["qc-out".to_string()].into()
        };
        assert!(new.is_subset(&allowed), "{new:?}");
    }
}

// ---------------------------------------------------------------------------------------------
// 6. Bad arguments

#[test]
fn qc_without_project_or_record_cannot_run() {
    let o = ebbwise(&["qc"]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(e.contains("required") && e.contains("PROJECT"), "{e}");
}

#[test]
fn qc_of_an_unknown_gauge_names_the_known_ones() {
    let out = tempfile::tempdir().unwrap();
    let o = ebbwise(&[
        "qc",
        repo().join("zoning-demo/project.toml").to_str().unwrap(),
        "--gauge",
        "nosuch",
        "--out",
        out.path().join("q").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(e.contains("'nosuch'"), "{e}");
    for g in ["orlick", "pendrath", "skellan"] {
        assert!(e.contains(g), "{e}");
    }
    assert!(!out.path().join("q").exists(), "nothing written");
}

#[test]
fn qc_record_with_bad_units_or_missing_file_cannot_run() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("r.csv");
    std::fs::write(&input, "time,height\n2026-06-14T00:00:00Z,1.0\n").unwrap();
    let out = dir.path().join("q");
    let o = ebbwise(&[
        "qc",
        "--record",
        input.to_str().unwrap(),
        "--units",
        "yards",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("yards"), "{}", stderr(&o));
    let o = ebbwise(&[
        "qc",
        "--record",
        dir.path().join("missing.csv").to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("missing.csv"), "{}", stderr(&o));
}

// ---------------------------------------------------------------------------------------------
// 7. One gauge only (`--gauge`)

/// `--gauge X` writes X's files with a summary named for X and never rewrites the whole
/// project's `qc-summary.json` or `gauge-differences.csv`. The project is the two-gauge one plus
/// g3, outside every zone and feeding none, so no comparison involves g3.
#[test]
fn qc_of_one_gauge_leaves_the_project_summary_alone() {
    let p = two_gauge_project(tide);
    let g1 = std::fs::read_to_string(p.path("g1.csv")).unwrap();
    p.write("g3.csv", &g1);
    let text = std::fs::read_to_string(p.path("project.toml")).unwrap();
    p.write(
        "project.toml",
        &format!(
            "{text}\n[[gauge]]\nid = \"g3\"\nlon = 9.9\nlat = 49.9\nrecord = \"g3.csv\"\nunits = \"m\"\nzero_above_datum_m = 1.0\nmean_level_above_datum_m = 2.1\n"
        ),
    );
    let out = p.path("qc");
    let project = p.project();
    let out_text = out.to_str().unwrap().to_string();
    let run = |extra: &[&str]| {
        let mut args = vec!["qc", project.as_str(), "--out", out_text.as_str()];
        args.extend_from_slice(extra);
        ebbwise(&args)
    };
    let o = run(&[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let whole = std::fs::read(out.join("qc-summary.json")).unwrap();
    let diffs = std::fs::read(out.join("gauge-differences.csv")).unwrap();
    assert_eq!(summary(&out)["gauges"].as_array().unwrap().len(), 3);

    let o = run(&["--gauge", "g1"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let one: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("qc-summary.g1.json")).unwrap()).unwrap();
    let ids: Vec<&str> = one["gauges"]
        .as_array()
        .unwrap()
        .iter()
        .map(|g| g["gauge"].as_str().unwrap())
        .collect();
    assert_eq!(ids, ["g1"]);
    comparison(&one, "g2-g1@Z");
    assert!(out.join("gauge-differences.g1.csv").is_file());
    assert!(stderr(&o).contains("qc-summary.g1.json"), "{}", stderr(&o));

    let o = run(&["--gauge", "g3"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let e = stderr(&o);
    assert!(e.contains("no comparison involves gauge 'g3'"), "{e}");
    assert!(!e.contains("no zone is fed by two gauges"), "{e}");
    let three: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("qc-summary.g3.json")).unwrap()).unwrap();
    assert_eq!(
        three["comparisons_note"],
        "no comparison involves gauge 'g3'"
    );
    assert!(
        !out.join("gauge-differences.g3.csv").exists(),
        "no comparison, no file"
    );

    // The whole project's files are exactly as the full run wrote them.
    assert_eq!(std::fs::read(out.join("qc-summary.json")).unwrap(), whole);
    assert_eq!(
        std::fs::read(out.join("gauge-differences.csv")).unwrap(),
        diffs
    );
}

/// Whether QC ran, and per gauge how many samples it set aside, in every output that depends on
/// it: the QA report (JSON and page) of a reduction, and `ebbwise qc`'s summary and text. The
/// faulty record has 121 samples, 00:00 to 12:00 every 6 min; QC sets aside the spike at 03:00
/// (1 sample) and, for the level shift at 08:00, the record from 08:00 to its end (08:00 to
/// 12:00 every 6 min: 41 samples), 42 in all (see `faulty_record` and `FAULT_SOUNDINGS`).
#[test]
fn qc_ran_or_not_and_what_it_set_aside_is_stated_everywhere() {
    for qc_enabled in [true, false] {
        let (p, rec) = fault_project(qc_enabled);
        assert_eq!(rec.len(), 121);
        let text = std::fs::read_to_string(p.path("project.toml")).unwrap();
        p.write(
            "project.toml",
            &format!("{text}\n[uncertainty]\norder = \"2\"\n"),
        );
        let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
        assert!(matches!(o.status.code(), Some(0 | 1)), "{}", stderr(&o));
        let report: serde_json::Value =
            serde_json::from_slice(&std::fs::read(p.path("out/qa-report.json")).unwrap()).unwrap();
        assert_eq!(report["qc_ran"], qc_enabled, "{report:#}");
        let want_set_aside = if qc_enabled {
            serde_json::json!(42)
        } else {
            serde_json::Value::Null
        };
        assert_eq!(
            report["qc_gauges"],
            serde_json::json!([{"gauge": "g1", "samples": 121, "set_aside": want_set_aside}])
        );
        let html = std::fs::read_to_string(p.path("out/qa-report.html")).unwrap();
        let (said, not_said) = if qc_enabled {
            ("Gauge quality control <b>ran</b>", "<b>did not run</b>")
        } else {
            ("Gauge quality control <b>did not run</b>", "<b>ran</b>")
        };
        assert!(
            html.contains(said) && !html.contains(not_said),
            "{qc_enabled}"
        );
        let row = if qc_enabled {
            "<tr><td>g1</td><td>121</td><td>42</td></tr>"
        } else {
            "<tr><td>g1</td><td>121</td><td>not checked</td></tr>"
        };
        assert!(html.contains(row), "{qc_enabled}");
        // `ebbwise qc` always runs QC, and says whether the project's reductions do.
        let out = p.path("qcout").to_string_lossy().into_owned();
        let o = ebbwise(&["qc", &p.project(), "--out", &out]);
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        let s = summary(&p.path("qcout"));
        assert_eq!(s["qc_ran"], true);
        assert_eq!(s["qc_in_reductions"], qc_enabled);
        let g = gauge_summary(&s, "g1");
        assert_eq!(
            (g["samples"].as_u64(), g["set_aside"].as_u64()),
            (Some(121), Some(42))
        );
        let err = stderr(&o);
        assert!(
            err.contains("121 samples every 6.0 min, 79 usable"),
            "{err}"
        );
        assert!(err.contains("42 set aside by quality control"), "{err}");
        assert_eq!(
            err.contains("but the project sets [qc] enabled = false"),
            !qc_enabled,
            "{err}"
        );
    }
}

/// A mini project whose gauge record is `record_text` and whose soundings lie in zone Z1 at the
/// given times; runs `ebbwise qc` (exit 1: faults found) and returns the project and the QC file.
fn qc_of_record_with_soundings(
    record_text: &str,
    soundings: &[(&str, &str)],
) -> (MiniProject, Vec<String>, Vec<Vec<String>>) {
    let mut s = String::from("time,lon,lat,depth,line\n");
    for (t, _) in soundings {
        s.push_str(&format!("{t},10.005,50.005,15.0,L1\n"));
    }
    let p = MiniProject::new(&s);
    p.write("g1.csv", record_text);
    let qc_out = p.path("qc");
    let o = ebbwise(&["qc", &p.project(), "--out", qc_out.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let (h, rows) = read_csv(&qc_out.join("g1.qc.csv"));
    (p, h, rows)
}

/// Each sounding of the last reduction has the status paired with its time.
fn assert_statuses(p: &MiniProject, soundings: &[(&str, &str)]) {
    let (h, rows) = read_csv(&p.path("out/s.reduced.csv"));
    assert_eq!(rows.len(), soundings.len());
    for (r, (t, status)) in rows.iter().zip(soundings) {
        assert_eq!(
            col(&h, r, "status"),
            *status,
            "{t}: {}",
            col(&h, r, "status_detail")
        );
    }
}

/// A logger clock 1 h ahead for a day (a six-minute record over three days of `tide` with 5 mm
/// noise, the clock jumping at 2026-06-15T00:00Z and set back a day later): QC flags the day's
/// samples `time_lag` naming the lag, and a sounding in that day is `gauge_flagged`, while the
/// days before and after are reduced.
#[test]
fn reducer_sets_aside_a_day_of_clock_jump() {
    let t0 = ts("2026-06-14T00:00:00Z");
    let (jump, back) = (ts("2026-06-15T00:00:00Z"), ts("2026-06-16T00:00:00Z"));
    let mut noise = Noise::new(0.005, 71);
    let samples: Vec<(i64, f64)> = (0..=720)
        .map(|i| {
            let t = t0 + i * 360;
            let h = tide(t as f64) - 1.0 + noise.next();
            (if t >= jump && t < back { t + 3600 } else { t }, h)
        })
        .collect();
    let (text, _) = record_csv(&samples);
    let sounding_times = [
        ("2026-06-14T12:00:00Z", "reduced"),
        ("2026-06-15T12:00:00Z", "gauge_flagged"),
        ("2026-06-16T12:00:00Z", "reduced"),
    ];
    let (p, h, rows) = qc_of_record_with_soundings(&text, &sounding_times);
    // Sample i is line i + 2; the jumped samples are 240..480.
    for r in &rows {
        let line: i64 = col(&h, r, "line").parse().unwrap();
        let flags = col(&h, r, "qc_flags");
        let jumped = (242..482).contains(&line);
        // The last jumped hour (lines 472..482) carries the times the genuine hour after it
        // (lines 482..492) repeats: both copies of each such time are set aside as
        // duplicate_time, the rest of the jumped day as time_lag.
        let repeated = (472..492).contains(&line);
        assert_eq!(
            flags.contains("time_lag"),
            jumped && !repeated,
            "line {line}: {flags}"
        );
        assert_eq!(
            flags.contains("duplicate_time"),
            repeated,
            "line {line}: {flags}"
        );
        if jumped && !repeated {
            assert!(
                col(&h, r, "qc_detail").contains("+60 min"),
                "line {line}: {}",
                col(&h, r, "qc_detail")
            );
        }
    }

    // The repeated hour holds times written twice with different readings: by default the
    // reduction refuses the record, naming both lines; the project may set both copies aside.
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("g1.csv:482: field 'time': time '2026-06-16T00:00:00Z' is also at line 472 with another reading"),
        "{}",
        stderr(&o)
    );
    let text = std::fs::read_to_string(p.path("project.toml")).unwrap();
    p.write(
        "project.toml",
        &format!("{text}\n[qc]\nduplicate_time_conflict = \"set_both_aside\"\n"),
    );
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert_statuses(&p, &sounding_times);
}

/// A +0.15 m level shift 1.7 h after a 48-min hole (a one-minute record over two days of `tide`
/// with 5 mm noise): QC sets aside the record from the shift on, and a sounding after the shift
/// is `gauge_flagged`, not reduced with a tide 0.15 m too high; one before the hole is reduced.
/// (With the boundary tests off, `[qc] boundary_window_min = 1`, this shift passes QC.)
#[test]
fn reducer_sets_aside_a_shift_next_to_a_hole() {
    let t0 = ts("2026-06-14T00:00:00Z");
    let (hole, hole_end) = (ts("2026-06-14T16:00:00Z"), ts("2026-06-14T16:48:00Z"));
    let shift = hole_end + 102 * 60;
    let mut noise = Noise::new(0.005, 72);
    let samples: Vec<(i64, f64)> = (0..=2880)
        .map(|i| {
            let t = t0 + i * 60;
            let h = tide(t as f64) - 1.0 + noise.next();
            (t, if t >= shift { h + 0.15 } else { h })
        })
        .filter(|&(t, _)| t < hole || t >= hole_end)
        .collect();
    let (text, _) = record_csv(&samples);
    let soundings = [
        ("2026-06-14T12:00:00Z", "reduced"),
        ("2026-06-14T20:00:00Z", "gauge_flagged"),
        ("2026-06-15T12:00:00Z", "gauge_flagged"),
    ];
    let (p, h, rows) = qc_of_record_with_soundings(&text, &soundings);
    for r in &rows {
        let t = ts(col(&h, r, "time_utc"));
        let flags = col(&h, r, "qc_flags");
        if t >= shift {
            assert!(flags.contains("level_shift"), "{}: {flags}", utc(t));
        } else if t < hole - 6 * 3600 {
            assert_eq!(flags, "", "{}", utc(t));
        }
    }

    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert_statuses(&p, &soundings);
}

// ---------------------------------------------------------------------------------------------
// 7. Limits taken from the record, and the project's own

/// A 3-day 6-min record of a macrotidal tide (M2 6.5, S2 1.0, M4 0.4 m around 8 m; peak rate
/// about 4.3 m/h, from A·ω summed over the constituents) with 1 cm noise, in the mini project
/// (gauge zero 1.0 m, mean level set to 8 m). At the default `[qc]` the rate limit is taken from
/// the record and nothing is flagged; with `max_rate_m_per_h = 3.0` and `flat_min_duration_min =
/// 60` written in `[qc]` those values are used as written (the project's value wins) and the
/// tide's own rise is flagged `rate`. Both runs report the limits and where they came from in
/// `qc-summary.json` and on stderr.
#[test]
fn rate_limit_comes_from_the_record_unless_the_project_sets_it() {
    let t0 = ts("2026-06-14T00:00:00Z");
    let mut noise = Noise::new(0.01, 91);
    let level = |t: i64| {
        let h = (t - t0) as f64 / 3600.0;
        8.0 + [
            (6.5, 28.984_104_2, 40.0),
            (1.0, 30.0, 75.0),
            (0.4, 57.968_208_4, 170.0),
        ]
        .iter()
        .map(|&(a, w, g): &(f64, f64, f64)| a * (w * h - g).to_radians().cos())
        .sum::<f64>()
    };
    let samples: Vec<(i64, f64)> = (0..3 * 240)
        .map(|i| {
            let t = t0 + i * 360;
            (t, level(t) - 1.0 + noise.next())
        })
        .collect();
    let (text, _) = record_csv(&samples);
    let p = MiniProject::new("time,lon,lat,depth,line\n");
    p.write("g1.csv", &text);
    let macro_project = MINI_PROJECT.replace(
        "mean_level_above_datum_m = 2.1",
        "mean_level_above_datum_m = 8.0",
    );
    for (qc_table, code) in [
        ("", 0),
        (
            "[qc]\nmax_rate_m_per_h = 3.0\nflat_min_duration_min = 60\n",
            1,
        ),
    ] {
        p.write("project.toml", &format!("{macro_project}\n{qc_table}"));
        let out = p.path("qc");
        let o = ebbwise(&["qc", &p.project(), "--out", out.to_str().unwrap()]);
        assert_eq!(o.status.code(), Some(code), "{}", stderr(&o));
        let s = summary(&out);
        let g = gauge_summary(&s, "g1");
        let l = &g["limits"];
        let rate = l["max_rate_m_per_h"].as_f64().unwrap();
        if qc_table.is_empty() {
            assert_eq!(g["set_aside"], 0, "{g}");
            assert_eq!(l["max_rate_from"], "record", "{l}");
            let own = l["record_fast_rate_m_per_h"].as_f64().unwrap();
            assert!((3.5..4.6).contains(&own), "{l}");
            assert!((rate - 1.5 * own).abs() < 2e-4, "{l}");
            assert_eq!(l["flat_rule_from"], "default");
            assert_eq!(l["stands_excused"], true);
            assert!(stderr(&o).contains("rate limit"), "{}", stderr(&o));
        } else {
            assert_eq!(l["max_rate_from"], "project", "{l}");
            assert_eq!(rate, 3.0);
            assert!(l["record_fast_rate_m_per_h"].is_null(), "{l}");
            assert_eq!(l["flat_rule_from"], "project");
            assert_eq!(l["flat_min_duration_min"], 60.0);
            assert_eq!(l["stands_excused"], false);
            assert!(g["flags"]["rate"].as_u64().unwrap() > 10, "{g}");
            assert!(stderr(&o).contains("set in [qc]"), "{}", stderr(&o));
        }
    }
}
