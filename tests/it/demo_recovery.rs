//! End to end: reduce the bundled demo survey and recover the generator's true seabed.
//!
//! Error budget for the bounds (values from zoning-demo/truth/generator.json, written by the
//! generator that made the data):
//! * sounding noise σ_s = 0.05 m and rounding of depths to 0.01 m (σ = 0.01/√12 ≈ 0.003 m);
//! * gauge noise σ_g = 0.01 m (interpolation between two noisy samples keeps it ≤ 0.01 m);
//! * zoning error: the zones' single Δt and R cannot follow the true field's small M4 overtide
//!   (up to 0.06 m at the head), its cross-axis lag (1 min/km) and the rounding of Δt to 1 min
//!   and R to 0.01. Measured here directly against the true tide: bounded at RMS 0.04 m.
//!
//! Depth error RMS ≤ √(0.05² + 0.003² + 0.04²) ≈ 0.064 m → bound 0.07 m (sampling slack);
//! 95th percentile of |error| ≤ 1.96 × 0.064 ≈ 0.126 m → bound 0.135 m; mean |bias| ≤ 0.015 m.
//!
//! `zoning-demo/gap-fill.toml`, the same survey with `[gap_fill]`, fills pendrath's 50-min gap and the samples QC set aside at skellan (`[gap_fill]`):
//! every sounding the generator placed behind them is `gap_filled`. Their tide adds the fill's
//! error to the zoning's. Bound for it: the fill's measured standard uncertainty stays below
//! 0.015 m mid-gap (printed in the reduce warnings), a filled level carries no sensor noise, and
//! the zoning's own error is at most `zoning_model_error_m.max_abs` (0.078 m, generator.json)
//! wherever the filled rows lie; so the tide error RMS on filled rows ≤ √(0.078² + 0.015²) ≈
//! 0.080 m → bound 0.08 m, and every filled row's error within 0.078 + 3 × 0.015 ≈ 0.12 m →
//! bound 0.13 m.

use super::{ebbwise, read_csv, repo, stderr};

struct Errors {
    n: usize,
    filled: usize,
    filled_tide_rms: f64,
    filled_tide_max: f64,
    depth_rms: f64,
    depth_p95: f64,
    depth_mean: f64,
    tide_rms: f64,
}

fn compare(reduced: &std::path::Path, truth: &std::path::Path) -> (Errors, usize) {
    let (h, rows) = read_csv(reduced);
    let (th, truth_rows) = read_csv(truth);
    assert_eq!(rows.len(), truth_rows.len(), "one output row per input row");
    let c = |n: &str| h.iter().position(|x| x == n).unwrap();
    let tc = |n: &str| th.iter().position(|x| x == n).unwrap();
    let (mut de, mut te) = (Vec::new(), Vec::new());
    let mut fe = Vec::new();
    let mut not_reduced = 0;
    for (r, t) in rows.iter().zip(&truth_rows) {
        if r[c("status")] == "gap_filled" {
            let tide: f64 = r[c("tide_m")].parse().unwrap();
            fe.push(tide - t[tc("true_tide_m")].parse::<f64>().unwrap());
            continue;
        }
        if r[c("status")] != "reduced" {
            not_reduced += 1;
            continue;
        }
        let d: f64 = r[c("reduced_depth_m")].parse().unwrap();
        let tide: f64 = r[c("tide_m")].parse().unwrap();
        de.push(d - t[tc("true_depth_below_datum_m")].parse::<f64>().unwrap());
        te.push(tide - t[tc("true_tide_m")].parse::<f64>().unwrap());
    }
    let rms = |v: &[f64]| (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt();
    let mut abs: Vec<f64> = de.iter().map(|x| x.abs()).collect();
    abs.sort_by(f64::total_cmp);
    (
        Errors {
            n: de.len(),
            filled: fe.len(),
            filled_tide_rms: if fe.is_empty() { 0.0 } else { rms(&fe) },
            filled_tide_max: fe.iter().fold(0.0, |m: f64, x| m.max(x.abs())),
            depth_rms: rms(&de),
            depth_p95: abs[(0.95 * abs.len() as f64) as usize],
            depth_mean: de.iter().sum::<f64>() / de.len() as f64,
            tide_rms: rms(&te),
        },
        not_reduced,
    )
}

#[test]
fn demo_survey_recovers_the_true_seabed() {
    recovers("zoning-demo/project.toml", false);
}

#[test]
fn gap_filled_demo_survey_recovers_the_true_tide_behind_the_gaps() {
    recovers("zoning-demo/gap-fill.toml", true);
}

fn recovers(project: &str, filled: bool) {
    let out_dir = tempfile::tempdir().unwrap();
    let out = ebbwise(&[
        "reduce",
        repo().join(project).to_str().unwrap(),
        "--out",
        out_dir.path().to_str().unwrap(),
        "--no-progress",
    ]);
    assert_eq!(
        out.status.code(),
        Some(1),
        "the demo has rows that cannot be reduced: {}",
        stderr(&out)
    );
    let gen: serde_json::Value = serde_json::from_slice(
        &std::fs::read(repo().join("zoning-demo/truth/generator.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(gen["sounding_noise_sd_m"].as_f64(), Some(0.05));
    assert_eq!(gen["gauge_noise_sd_m"].as_f64(), Some(0.01));
    for (name, input) in [("launch-a", "launch-a.csv"), ("launch-b", "launch-b.txt")] {
        let (e, not_reduced) = compare(
            &out_dir.path().join(format!("{name}.reduced.csv")),
            &repo().join(format!("zoning-demo/truth/{name}.csv")),
        );
        let meta = &gen["files"][format!("soundings/{input}")];
        let behind_gaps =
            meta["in_pendrath_gap"].as_u64().unwrap() + meta["in_skellan_fault"].as_u64().unwrap();
        let expected_not_reduced = meta["outside_zoning"].as_u64().unwrap()
            + meta["corrupt_rows"].as_array().unwrap().len() as u64
            + if filled { 0 } else { behind_gaps };
        assert_eq!(not_reduced as u64, expected_not_reduced, "{name}");
        assert_eq!(
            e.filled as u64,
            if filled { behind_gaps } else { 0 },
            "{name}"
        );
        eprintln!(
            "{name}: {} reduced; depth error RMS {:.4} m, P95 {:.4} m, mean {:+.4} m; tide error RMS {:.4} m; {} gap_filled, tide error RMS {:.4} m, worst {:.4} m",
            e.n, e.depth_rms, e.depth_p95, e.depth_mean, e.tide_rms, e.filled, e.filled_tide_rms, e.filled_tide_max
        );
        if filled {
            assert!(
                e.filled_tide_rms < 0.08,
                "{name}: filled tide RMS {}",
                e.filled_tide_rms
            );
            assert!(
                e.filled_tide_max < 0.13,
                "{name}: filled tide worst {}",
                e.filled_tide_max
            );
        }
        // Enough soundings compared for the statistics below (launch B has ~15 % of its rows
        // behind the pendrath gap and skellan's flagged samples, gap_filled and counted apart).
        assert!(e.n > 35_000, "{name}: {}", e.n);
        assert!(e.tide_rms < 0.04, "{name}: tide RMS {}", e.tide_rms);
        assert!(e.depth_rms < 0.07, "{name}: RMS {}", e.depth_rms);
        assert!(e.depth_p95 < 0.135, "{name}: P95 {}", e.depth_p95);
        assert!(e.depth_mean.abs() < 0.015, "{name}: mean {}", e.depth_mean);
    }
}

/// Tide and depth errors against the truth over every sounding with a tide (reduced and
/// gap_filled), both launches.
struct Overall {
    n: usize,
    tide_rms: f64,
    tide_p95: f64,
    depth_rms: f64,
    depth_p95: f64,
}

fn overall(project: &std::path::Path) -> Overall {
    let out_dir = tempfile::tempdir().unwrap();
    let out = ebbwise(&[
        "reduce",
        project.to_str().unwrap(),
        "--out",
        out_dir.path().to_str().unwrap(),
        "--no-progress",
    ]);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let (mut te, mut de) = (Vec::new(), Vec::new());
    for name in ["launch-a", "launch-b"] {
        let (h, rows) = read_csv(&out_dir.path().join(format!("{name}.reduced.csv")));
        let (th, truth) = read_csv(&repo().join(format!("zoning-demo/truth/{name}.csv")));
        assert_eq!(rows.len(), truth.len(), "one output row per input row");
        let c = |n: &str| h.iter().position(|x| x == n).unwrap();
        let tc = |n: &str| th.iter().position(|x| x == n).unwrap();
        for (r, t) in rows.iter().zip(&truth) {
            if r[c("status")] != "reduced" && r[c("status")] != "gap_filled" {
                continue;
            }
            let f = |row: &Vec<String>, i: usize| row[i].parse::<f64>().unwrap();
            te.push(f(r, c("tide_m")) - f(t, tc("true_tide_m")));
            de.push(f(r, c("reduced_depth_m")) - f(t, tc("true_depth_below_datum_m")));
        }
    }
    let rms = |v: &[f64]| (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt();
    let p95 = |v: &[f64]| {
        let mut a: Vec<f64> = v.iter().map(|x| x.abs()).collect();
        a.sort_by(f64::total_cmp);
        a[(0.95 * a.len() as f64) as usize]
    };
    Overall {
        n: te.len(),
        tide_rms: rms(&te),
        tide_p95: p95(&te),
        depth_rms: rms(&de),
        depth_p95: p95(&de),
    }
}

/// The continuous tide (`zoning-demo/continuous.toml`, both modes) against the discrete
/// zoning of the same survey (`gap-fill.toml`), over the same soundings, against the
/// generator's true tide and seabed (invented data: the demo's own truth, no outside
/// reference).
///
/// Bounds, from the generator (truth/generator.json): the true tide is a smooth field over the
/// estuary; the zoning's correctors are the truth's at each zone's centroid, so its error is
/// the field's variation within a zone (RMS `zoning_model_error_m.rms` ≈ 0.030 m). The
/// continuous tide carries the gauges' records across the field of their constants (analysed
/// from 60 noisy days) and seven virtual gauges: what remains is the field's departure from
/// linear between stations and the constants' analysis error, a few millimetres, and the
/// gauges' noise (σ 0.01 m, blended). So the tide error must fall by at least three times
/// (the aim where the gauges resolve the field) and stay within 0.012 m RMS; the
/// depth error, whose sounding noise (σ 0.05 m, rounding 0.003 m) both share, falls to at
/// most √(0.05² + 0.003² + 0.012²) ≈ 0.052 m RMS (bound 0.055 m) and 1.96 × 0.052 ≈ 0.101 m
/// at the 95th percentile (bound 0.105 m), and below the zoning's in both.
#[test]
fn a_continuous_tide_between_the_gauges_beats_the_zoning_on_the_demo() {
    let discrete = overall(&repo().join("zoning-demo/gap-fill.toml"));
    let text = std::fs::read_to_string(repo().join("zoning-demo/continuous.toml")).unwrap();
    assert!(text.contains("mode = \"corrector_field\""));
    // The other mode: the same project in a temporary folder, its paths made absolute.
    let dir = tempfile::tempdir().unwrap();
    let demo = repo().join("zoning-demo");
    let at = |sub: &str| format!("\"{}/{sub}", demo.display());
    let astro = text
        .replace(
            "mode = \"corrector_field\"",
            "mode = \"astronomical_residual\"",
        )
        .replace("\"gauges/", &at("gauges/"))
        .replace("\"tide-model/", &at("tide-model/"))
        .replace("\"soundings/", &at("soundings/"))
        .replace("\"zoning.geojson\"", &(at("zoning.geojson") + "\""));
    std::fs::write(dir.path().join("astronomical.toml"), astro).unwrap();
    eprintln!(
        "zoning: {} soundings, tide error RMS {:.4} m, P95 {:.4} m; depth error RMS {:.4} m, P95 {:.4} m",
        discrete.n, discrete.tide_rms, discrete.tide_p95, discrete.depth_rms, discrete.depth_p95
    );
    for (mode, project) in [
        ("corrector_field", demo.join("continuous.toml")),
        (
            "astronomical_residual",
            dir.path().join("astronomical.toml"),
        ),
    ] {
        let c = overall(&project);
        eprintln!(
            "{mode}: {} soundings, tide error RMS {:.4} m, P95 {:.4} m; depth error RMS {:.4} m, P95 {:.4} m",
            c.n, c.tide_rms, c.tide_p95, c.depth_rms, c.depth_p95
        );
        assert_eq!(c.n, discrete.n, "{mode}: the same soundings get a tide");
        assert!(
            c.tide_rms * 3.0 <= discrete.tide_rms,
            "{mode}: {} vs {}",
            c.tide_rms,
            discrete.tide_rms
        );
        assert!(
            c.tide_p95 * 3.0 <= discrete.tide_p95,
            "{mode}: {} vs {}",
            c.tide_p95,
            discrete.tide_p95
        );
        assert!(c.tide_rms < 0.012, "{mode}: tide RMS {}", c.tide_rms);
        assert!(
            c.depth_rms < 0.055 && c.depth_rms < discrete.depth_rms,
            "{mode}: depth RMS {}",
            c.depth_rms
        );
        assert!(
            c.depth_p95 < 0.105 && c.depth_p95 < discrete.depth_p95,
            "{mode}: depth P95 {}",
            c.depth_p95
        );
    }
}
