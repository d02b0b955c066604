//! `ebbwise transfer` through the command line: a synthetic subordinate whose relation to the
//! control is known exactly, the demo's short-term gauge against its generator's truth, the
//! same gauges taken from a project, and the refusals (no overlap, a common period too short, a
//! control datums file not tied to chart datum, an output over an input, a project's control
//! zero that its datums file was not computed with, a project control without datums).

use std::path::Path;

use super::{ebbwise, repo, stderr};
use ebbwise::compute::astro::constituent;
use ebbwise::compute::harmonic::{predict_grid, HarmonicConstants};

/// Shift, range scale and lag of the synthetic subordinate against the control.
const SHIFT_M: f64 = 0.37;
const SCALE: f64 = 0.85;
const LAG_S: f64 = 40.0 * 60.0;
const STEP_S: f64 = 360.0;
/// 2025-07-01T00:00:00Z.
const YEAR_T0_S: f64 = 1_751_328_000.0;
/// The control's zero above chart datum in its datums file: chart datum lies 0.2 m above the
/// control's zero, below its lowest tide (Z0 − ΣH = 0.35 m).
const CONTROL_ZERO_M: f64 = -0.2;

/// A mixed, mainly semidiurnal tide (form factor 0.37) on the control's zero.
fn control_constants() -> HarmonicConstants {
    let c = |n: &str| constituent(n).unwrap();
    HarmonicConstants {
        z0_m: 2.4,
        constituents: vec![
            (c("M2"), 1.0, 40.0),
            (c("S2"), 0.35, 70.0),
            (c("N2"), 0.2, 20.0),
            (c("K1"), 0.3, 120.0),
            (c("O1"), 0.2, 100.0),
        ],
    }
}

fn write_record(path: &Path, t0_s: f64, h: &[f64]) {
    let mut s = String::from("time,height\n");
    for (i, v) in h.iter().enumerate() {
        let t = ebbwise::io::timefmt::utc_time(t0_s + STEP_S * i as f64);
        s.push_str(&format!("{t},{v:.4}\n"));
    }
    std::fs::write(path, s).unwrap();
}

/// The control: a year of 6-minute predictions from 2025-07-01. The subordinate: `days` days
/// from `start_s`, the control 40 minutes earlier, its range scaled by 0.85 about Z0 and raised
/// by 0.37 m: `s(t) = 0.37 + Z0 + 0.85·(c(t − 40 min) − Z0)`.
fn write_pair(dir: &Path, start_s: f64, days: f64) {
    let k = control_constants();
    let n_year = (365.0 * 86_400.0 / STEP_S) as usize;
    write_record(
        &dir.join("control.csv"),
        YEAR_T0_S,
        &predict_grid(&k, YEAR_T0_S, STEP_S, n_year),
    );
    let n = (days * 86_400.0 / STEP_S) as usize;
    let sub: Vec<f64> = predict_grid(&k, start_s - LAG_S, STEP_S, n)
        .into_iter()
        .map(|c| SHIFT_M + k.z0_m + SCALE * (c - k.z0_m))
        .collect();
    write_record(&dir.join("sub.csv"), start_s, &sub);
}

fn run_in(dir: &Path, args: &[&str]) -> std::process::Output {
    super::ebbwise_in(dir, args)
}

fn control_datums(dir: &Path) {
    let o = run_in(
        dir,
        &[
            "datums",
            "control.csv",
            "--zero-above-datum-m",
            &CONTROL_ZERO_M.to_string(),
            "--no-qc",
            "--out",
            "control.datums.toml",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
}

fn toml_of(path: &Path) -> toml::Value {
    toml::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn f(v: &toml::Value, path: &str) -> f64 {
    let mut x = v;
    for k in path.split('.') {
        x = &x[k];
    }
    x.as_float()
        .unwrap_or_else(|| panic!("{path} is not a number: {x:?}"))
}

/// Shifted (+0.37 m), range ×0.85 and lagged 40 min against a year-long control, 30 days of
/// common period in June 2026. The transferred zero above chart datum is recovered to the
/// relation derived for the range-ratio method (the unit tests of `compute::transfer` and the
/// NOAA CO-OPS 2003 formulas): with every tidal-day value of the subordinate the affine image
/// `0.37 + Z0 + 0.85(x − Z0)` of the paired control day's, the great diurnal range ratio is 0.85
/// exactly, and chart datum carried below MLLW in proportion to GT lands at the affine image of
/// the control's chart datum plus the error of DTL, `(1 − 0.85)(DTL_c − DTL'_c)` (DTL_c the
/// control's long-term DTL, DTL'_c its mean over the common period). So
/// `zero = −(0.37 + Z0 + 0.85(CD_c − Z0) + 0.15(DTL_c − DTL'_c))`, CD_c = 0.2 m on the control's
/// zero. Tolerance 1 mm, twice the sum of: the file's rounding to 0.1 mm of the zero and of the
/// two DTLs (0.1 mm), the 0.1-mm rounding of the samples (below 0.05 mm after the fits), and
/// the difference of the parabola fit's bias between the two records, which sample the tide at
/// phases 2 minutes apart (the bias itself is `H·(ωW)⁴·0.0857/24` ≈ 0.1 mm at each gauge for
/// the ±45-min window, least-squares algebra): about 0.5 mm. The direct method errs by
/// `0.15·(CD_c − MLLW'_c)`, the same algebra with chart datum kept at a fixed depth below MLLW;
/// the range-ratio method is the default for this mixed tide.
#[test]
fn shifted_scaled_lagged_subordinate_is_recovered() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    // 2026-06-01T00:00:00Z.
    write_pair(dir, 1_780_272_000.0, 30.0);
    control_datums(dir);
    let o = run_in(
        dir,
        &[
            "transfer",
            "sub.csv",
            "--control-record",
            "control.csv",
            "--control-datums",
            "control.datums.toml",
            "--no-qc",
        ],
    );
    let err = stderr(&o);
    assert!(o.status.success(), "{err}");
    let t = toml_of(&dir.join("sub.transfer.toml"));
    let d = toml_of(&dir.join("control.datums.toml"));
    assert_eq!(t["format"].as_str(), Some("ebbwise-datum-transfer/1"));
    assert_eq!(t["method"].as_str(), Some("modified_range_ratio"));
    let z0 = control_constants().z0_m;
    let cd_c = -CONTROL_ZERO_M;
    let dtl_c = f(&d, "dtl.above_gauge_zero_m");
    let dtl_p = f(&t, "period.control.dtl_m");
    let mllw_p = f(&t, "period.control.mllw_m");
    let affine_cd = SHIFT_M + z0 + SCALE * (cd_c - z0);
    let want_mrr = -(affine_cd + (1.0 - SCALE) * (dtl_c - dtl_p));
    let want_direct = -(affine_cd + (1.0 - SCALE) * (cd_c - mllw_p));
    let got = f(&t, "zero_above_datum_m");
    eprintln!(
        "range ratio: zero {got} m vs derived {want_mrr:.5} (error {:.5}); direct {} vs {want_direct:.5}; u {}",
        got - want_mrr,
        f(&t, "direct_level.zero_above_datum_m"),
        f(&t, "u_zero_above_datum_m")
    );
    assert!((got - want_mrr).abs() < 1e-3, "{got} vs {want_mrr}");
    assert_eq!(got, f(&t, "modified_range_ratio.zero_above_datum_m"));
    let direct = f(&t, "direct_level.zero_above_datum_m");
    assert!(
        (direct - want_direct).abs() < 1e-3,
        "{direct} vs {want_direct}"
    );
    // The GT ratio of an affine copy: 0.85, to the tabulation's error (0.5 mm on GT' ≈ 3 m).
    assert!((f(&t, "period.ratios.gt_ratio") - SCALE).abs() < 2e-4);
    // The difference table is the two methods' difference, to the rounding of the three values.
    let diff = f(&t, "difference.zero_above_datum_m");
    assert!((diff - (got - direct)).abs() < 2e-4);
    // The lines to paste, on stderr.
    assert!(
        err.contains(&format!("zero_above_datum_m = {got}"))
            && err.contains(&format!("u_datum_m = {}", f(&t, "u_zero_above_datum_m"))),
        "{err}"
    );
    // Forcing the direct method makes it the result.
    let o = run_in(
        dir,
        &[
            "transfer",
            "sub.csv",
            "--control-record",
            "control.csv",
            "--control-datums",
            "control.datums.toml",
            "--no-qc",
            "--method",
            "direct",
            "--out",
            "direct.toml",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let t = toml_of(&dir.join("direct.toml"));
    assert_eq!(t["method"].as_str(), Some("direct_level"));
    assert_eq!(t["method_chosen_by"].as_str(), Some("--method"));
    assert_eq!(f(&t, "zero_above_datum_m"), direct);
}

/// No overlap, a common period of 5 days (fewer than the default 15 tidal days), a control
/// datums file without a zero relation and an output over an input are refused (exit 2) with
/// the file, lines or field named.
#[test]
fn what_cannot_be_transferred_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    // A subordinate after the control's year: 2026-08-01.
    write_pair(dir, 1_785_542_400.0, 20.0);
    control_datums(dir);
    let args = [
        "transfer",
        "sub.csv",
        "--control-record",
        "control.csv",
        "--control-datums",
        "control.datums.toml",
    ];
    let o = run_in(dir, &args);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("sub.csv (field time, lines 2–")
            && err.contains("control.csv (lines 2–87601")
            && err.contains("do not overlap"),
        "{err}"
    );
    // Five days inside the control's year: 2026-06-01.
    write_pair(dir, 1_780_272_000.0, 5.0);
    let o = run_in(dir, &args);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("the common period of sub.csv and control.csv")
            && err.contains("fewer than the minimum 15 (--min-days)"),
        "{err}"
    );
    // Accepted with a smaller minimum.
    let mut fewer = args.to_vec();
    fewer.extend(["--min-days", "3"]);
    let o = run_in(dir, &fewer);
    assert!(o.status.success(), "{}", stderr(&o));
    // A datums file of the record's zero alone.
    let text = std::fs::read_to_string(dir.join("control.datums.toml")).unwrap();
    let untied: String = text
        .lines()
        .filter(|l| !l.starts_with("zero_above_datum_m") && !l.starts_with("above_chart_datum_m"))
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(dir.join("untied.toml"), untied).unwrap();
    let mut untied_args = fewer.clone();
    untied_args[5] = "untied.toml";
    let o = run_in(dir, &untied_args);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("untied.toml") && err.contains("zero_above_datum_m") && err.contains("absent"),
        "{err}"
    );
    // The output over an input.
    let mut over = fewer.clone();
    over.extend(["--out", "control.datums.toml"]);
    let before = std::fs::read(dir.join("control.datums.toml")).unwrap();
    let o = run_in(dir, &over);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("would overwrite the input"),
        "{}",
        stderr(&o)
    );
    assert_eq!(
        std::fs::read(dir.join("control.datums.toml")).unwrap(),
        before
    );
}

/// The demo's short-term gauge ferrisk (30 days of 6-minute readings around the survey day)
/// against orlick, whose long-term datums come from a year of its readings
/// (`gauges/orlick-year.csv`, chart datum at orlick: its zero 0.85 m below). The transferred
/// zero above chart datum is within 2.5 u of the generator's truth for the method used
/// (`truth/ferrisk.json`, computed by the generator from its noise-free tide over the same
/// year: chart datum carried below MLLW in proportion to GT), for both methods; the default is
/// the range-ratio method (the demo's tide is semidiurnal).
#[test]
fn the_demo_short_term_gauge_against_its_truth() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path();
    let demo = repo().join("zoning-demo");
    let datums = out.join("orlick-year.datums.toml");
    let o = ebbwise(&[
        "datums",
        demo.join("gauges/orlick-year.csv").to_str().unwrap(),
        "--zero-above-datum-m",
        "-0.85",
        "--out",
        datums.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(demo.join("truth/ferrisk.json")).unwrap())
            .unwrap();
    for (method, key) in [
        ("mrr", "zero_above_datum_by_range_ratio_m"),
        ("direct", "zero_above_datum_by_direct_level_m"),
    ] {
        let file = out.join(format!("{method}.toml"));
        let o = ebbwise(&[
            "transfer",
            demo.join("gauges/ferrisk.csv").to_str().unwrap(),
            "--control-record",
            demo.join("gauges/orlick-year.csv").to_str().unwrap(),
            "--control-datums",
            datums.to_str().unwrap(),
            "--control-u-datum-m",
            "0.03",
            "--method",
            method,
            "--out",
            file.to_str().unwrap(),
        ]);
        assert!(o.status.success(), "{}", stderr(&o));
        let t = toml_of(&file);
        let (got, u) = (f(&t, "zero_above_datum_m"), f(&t, "u_zero_above_datum_m"));
        let want = truth[key].as_f64().unwrap();
        eprintln!(
            "{method}: zero {got} m ± {u} vs truth {want} (error {:.4})",
            got - want
        );
        assert!(
            (got - want).abs() <= 2.5 * u,
            "{method}: {got} ± {u} vs {want}"
        );
        // u holds the control's chart datum (0.03 m) and cannot be below it.
        assert!(u >= 0.03, "{u}");
    }
    let o = ebbwise(&[
        "transfer",
        demo.join("gauges/ferrisk.csv").to_str().unwrap(),
        "--control-record",
        demo.join("gauges/orlick-year.csv").to_str().unwrap(),
        "--control-datums",
        datums.to_str().unwrap(),
        "--out",
        "-",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let t: toml::Value = toml::from_str(&String::from_utf8_lossy(&o.stdout)).unwrap();
    assert_eq!(t["method"].as_str(), Some("modified_range_ratio"));
}

/// A project holding the demo's gauges with ferrisk added (its zero a placeholder, 0) and
/// orlick's record the year, `datums` its datums file and `u_datum_m` 0.03 m.
fn demo_project(dir: &Path, orlick_zero_m: f64, with_datums: bool) -> String {
    let d = repo().join("zoning-demo");
    let d = d.to_str().unwrap();
    let datums = if with_datums {
        "datums = \"orlick-year.datums.toml\"\n"
    } else {
        ""
    };
    let text = format!(
        r#"name = "transfer"
zoning = "{d}/zoning.geojson"
[output]
dir = "out"
[[gauge]]
id = "orlick"
lon = -36.093966
lat = -47.550331
record = "{d}/gauges/orlick-year.csv"
units = "m"
zero_above_datum_m = {orlick_zero_m}
mean_level_above_datum_m = 2.61
u_datum_m = 0.03
{datums}[[gauge]]
id = "pendrath"
lon = -36.0
lat = -47.5
record = "{d}/gauges/pendrath.csv"
units = "m"
zero_above_datum_m = -1.20
mean_level_above_datum_m = 2.67
[[gauge]]
id = "skellan"
lon = -36.0
lat = -47.4
record = "{d}/gauges/skellan.csv"
units = "m"
zero_above_datum_m = 0.35
mean_level_above_datum_m = 2.74
[[gauge]]
id = "ferrisk"
lon = -36.0
lat = -47.45
record = "{d}/gauges/ferrisk.csv"
units = "m"
zero_above_datum_m = 0.0
mean_level_above_datum_m = 3.3
[[soundings]]
files = ["{d}/soundings/launch-a.csv"]
crs = "EPSG:32724"
columns = {{ time = "time", x = "easting", y = "northing", depth = "depth_m", line = "line" }}
"#
    );
    let path = dir.join("project.toml");
    std::fs::write(&path, text).unwrap();
    path.to_string_lossy().into_owned()
}

/// With `--project`: the same transfer as from the records (the same zero and u, to the
/// digit: the same readings, QC and control datums, chart datum's u from orlick's
/// `u_datum_m`), written to the project's output folder with the project's SHA-256; a project
/// whose control zero differs from the one its datums file was computed with, and a control
/// without a datums file, are refused naming the field or the option.
#[test]
fn a_project_gauge_against_its_control() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    let demo = repo().join("zoning-demo");
    let year = demo.join("gauges/orlick-year.csv");
    let o = run_in(
        dir,
        &[
            "datums",
            year.to_str().unwrap(),
            "--zero-above-datum-m",
            "-0.85",
            "--out",
            "orlick-year.datums.toml",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let o = run_in(
        dir,
        &[
            "transfer",
            demo.join("gauges/ferrisk.csv").to_str().unwrap(),
            "--control-record",
            year.to_str().unwrap(),
            "--control-datums",
            "orlick-year.datums.toml",
            "--control-u-datum-m",
            "0.03",
            "--out",
            "records.toml",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let project = demo_project(dir, -0.85, true);
    let o = run_in(
        dir,
        &[
            "transfer",
            "--project",
            &project,
            "--gauge",
            "ferrisk",
            "--control",
            "orlick",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let (a, b) = (
        toml_of(&dir.join("records.toml")),
        toml_of(&dir.join("out/ferrisk.transfer.toml")),
    );
    for key in [
        "zero_above_datum_m",
        "u_zero_above_datum_m",
        "u_control_datum_m",
    ] {
        assert_eq!(f(&a, key), f(&b, key), "{key}");
    }
    assert_eq!(b["subordinate"].as_str(), Some("ferrisk"));
    assert_eq!(b["control"].as_str(), Some("orlick"));
    assert_eq!(
        b["inputs"]["project_sha256"].as_str().map(str::len),
        Some(64)
    );
    // The project states another zero for orlick than its datums file was computed with.
    let project = demo_project(dir, -0.80, true);
    let o = run_in(
        dir,
        &[
            "transfer",
            "--project",
            &project,
            "--gauge",
            "ferrisk",
            "--control",
            "orlick",
        ],
    );
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("orlick-year.datums.toml: field 'zero_above_datum_m': expected the control's zero_above_datum_m of the project (-0.8 m), found -0.85 m"),
        "{err}"
    );
    // No datums file for the control.
    let project = demo_project(dir, -0.85, false);
    let o = run_in(
        dir,
        &[
            "transfer",
            "--project",
            &project,
            "--gauge",
            "ferrisk",
            "--control",
            "orlick",
        ],
    );
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("give --control-datums FILE: the control gauge 'orlick' names no datums file"),
        "{err}"
    );
}
