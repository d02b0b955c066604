//! Harmonic analysis of a one-year hourly record and a 19-year 6-minute prediction, against
//! their time targets, in this process and as whole `ebbwise` processes.
//!
//! ```text
//! cargo build --release --bin ebbwise
//! cargo bench --bench harmonics                  # 11 runs of each measurement
//! cargo bench --bench harmonics -- --runs 21 --wait-idle 0
//! ```
//!
//! Options after `--`: `--runs K` (default 11), `--retries R` (how many times a disturbed run is
//! discarded and run again, default 3), `--wait-idle S` (longest wait for an idle machine before
//! each measurement, default 60 s; 0 to skip).
//!
//! **Record**: `tests/fixtures/harmonics/record_1y.csv`, 8760 hourly heights (365 days from
//! 2025-03-03T05:00Z; see tests/reference/harmonics/README.md), read with `read_gauge_record`.
//!
//! **Constituents of the analysis**: every constituent of ebbwise's table that this record separates
//! by the Rayleigh criterion at factor 1 (360°/T, T = last − first sample = 8759 h, so 0.0411 °/h),
//! admitted greedily in order of equilibrium amplitude, then the others in table order. That gives
//! 58 constituents (117 unknowns with Z0): the whole table but SA (too close to Z0), PI1 (to P1),
//! S1 (to P1 and K1), PSI1 (to K1), T2 and R2 (to S2), and 2MK3 (MO3's speed). UTide picks 59 for
//! the same record: 56 of these plus three ebbwise does not tabulate (ALP1, BET1, UPS1).
//!
//! Measured, as medians over `--runs` runs (wall clock, `Instant`):
//!
//! 1. analysis with those 58 constituents: `design` (arguments, nodal corrections, the rows and
//!    the normal equations summed from them), `solve` (Cholesky, the rows again for the residual,
//!    its spectrum and diagnostics, covariance) and `analyse` (both),
//!    with nodal corrections per sample (the default) and at the record's centre; and `analyse`
//!    with ebbwise's automatic choice (what `ebbwise analyse` fits by default);
//! 2. what the solve spends its time on, its steps repeated on one thread on a matrix of the
//!    same shape (cos/sin columns at the same speeds over the same times, f = 1), with several
//!    ways of forming the normal equations: one row per pass over the upper triangle, four rows
//!    per pass (what `solve` does, there on blocks of rows spread over all cores), nalgebra's
//!    `tr_mul` (column dot products), nalgebra's general product (`matrixmultiply`), and that
//!    product by column blocks over the upper triangle only;
//! 3. prediction from the 37 largest constituents of analysis 1 over 19 years every 6 minutes
//!    (6940 days from 2025-01-01T00:00Z, 1 665 600 values): `predict_grid` and `high_low_waters`;
//! 4. whole processes (`<target>/release/ebbwise`, spawn to exit): `ebbwise analyse` of the record
//!    (automatic choice, and the 58 constituents) and `ebbwise predict` of the 19 years, writing the
//!    series and the high/low waters to the system's temporary directory.
//!
//! For every run the CPU time other processes used meanwhile is read from /proc/stat; a run in
//! which they used more than 0.1 CPU-second per second (plus 20 ms for the 10 ms tick of
//! /proc/stat) is disturbed, discarded and run again (at most `--retries` times). The ebbwise binary
//! is not built here: build it first with `cargo build --release --bin ebbwise`. The Python
//! comparison (UTide) is `tests/reference/harmonics/bench_side_by_side.sh`. Figures are kept in
//! docs/benchmarks.md.

use std::fs;
use std::hint::black_box;
use std::path::Path;
use std::process::{Command, Stdio};

use ebbwise::compute::astro::{constituent, constituents, Constituent};
use ebbwise::compute::harmonic::{
    analyse, design, high_low_waters, predict_grid, solve, AnalysisSettings, HarmonicConstants,
    NodalMode,
};
use ebbwise::io::constants::ConstantsFile;
use ebbwise::io::gauge_csv::read_gauge_record;
use ebbwise::io::project::{GaugeSpec, HeightUnit};
use ebbwise::run::harmonics::predict_file;
use nalgebra::{DMatrix, DVector};

mod common;
use common::{Run, Runner, Timed, DISTURBED_OTHER_CPU_PER_WALL};

/// The benchmark record, relative to the repository.
const RECORD: &str = "tests/fixtures/harmonics/record_1y.csv";
/// Rayleigh factor for the constituent list.
const RAYLEIGH_FACTOR: f64 = 1.0;
/// Constituents kept for the prediction (the largest of the analysis).
const PREDICTION_CONSTITUENTS: usize = 37;
/// First instant of the prediction: 2025-01-01T00:00:00Z, seconds since 1970-01-01.
const PREDICTION_T0_S: f64 = 1_735_689_600.0;
/// Prediction step, seconds (6 minutes).
const PREDICTION_STEP_S: f64 = 360.0;
/// Prediction length: 6940 days (19 Julian years round up to 6940 days) of 240 values.
const PREDICTION_N: usize = 6940 * 240;
/// The same span for `ebbwise predict` (`--to` is included when it is on the grid).
const PREDICTION_FROM: &str = "2025-01-01T00:00:00Z";
const PREDICTION_TO: &str = "2044-01-01T23:54:00Z";
/// The time targets: the least-squares solve, and the 19-year prediction.
const TARGET_SOLVE_S: f64 = 0.020;
const TARGET_PREDICTION_S: f64 = 1.0;

/// Allowance for the resolution of /proc/stat (two 10 ms ticks), seconds: a run is disturbed
/// when other processes used more than `DISTURBED_OTHER_CPU_PER_WALL` CPU-seconds per second of
/// its wall time plus this.
const TICK_ALLOWANCE_S: f64 = 0.02;

impl Runner {
    /// Times `f` over `self.runs` runs after one untimed warm-up run, waiting for an idle machine
    /// first. Returns the timings and the last result.
    fn measure<T>(&self, label: &str, mut f: impl FnMut() -> T) -> (Timed, T) {
        self.wait_for_idle();
        let mut last = black_box(f());
        let mut kept: Vec<Run> = Vec::with_capacity(self.runs);
        let (mut disturbed, mut discarded) = (0, 0);
        for _ in 0..self.runs {
            let mut attempt = 0;
            loop {
                attempt += 1;
                let (run, r) = common::time_run(|| black_box(f()));
                drop(std::mem::replace(&mut last, r));
                let is_disturbed = common::disturbed(run.other_cpu_s, run.wall_s, TICK_ALLOWANCE_S);
                if is_disturbed && attempt <= self.retries {
                    discarded += 1;
                    self.wait_for_idle();
                    continue;
                }
                disturbed += usize::from(is_disturbed);
                kept.push(run);
                break;
            }
        }
        let t = Timed::new(label.to_string(), &kept, disturbed, discarded);
        eprintln!("harmonics: {:<58} median {}", t.label, ms(t.median_s));
        (t, last)
    }
}

fn ms(s: f64) -> String {
    if s < 0.1 {
        format!("{:.2} ms", s * 1e3)
    } else {
        format!("{:.1} ms", s * 1e3)
    }
}

/// Every table constituent the record separates at `factor`: admitted greedily in order of
/// equilibrium amplitude, then the others (no equilibrium amplitude) in table order, each when
/// its speed differs from Z0's and every admitted one's by at least `factor · 360° / length_h`.
fn separable_constituents(
    length_h: f64,
    factor: f64,
) -> (Vec<&'static Constituent>, Vec<(&'static str, &'static str)>) {
    let mut candidates: Vec<&'static Constituent> = constituents()
        .iter()
        .filter(|c| c.name != "Z0" && c.equilibrium_rel_m2.is_some())
        .collect();
    candidates.sort_by(|a, b| {
        b.equilibrium_rel_m2
            .unwrap_or(0.0)
            .total_cmp(&a.equilibrium_rel_m2.unwrap_or(0.0))
    });
    candidates.extend(
        constituents()
            .iter()
            .filter(|c| c.equilibrium_rel_m2.is_none()),
    );
    let need = factor * 360.0 / length_h;
    let z0 = constituent("Z0").expect("Z0 in the table");
    let mut chosen: Vec<&'static Constituent> = Vec::new();
    let mut left_out = Vec::new();
    for c in candidates {
        let nearest = std::iter::once(z0)
            .chain(chosen.iter().copied())
            .min_by(|x, y| {
                (c.speed_deg_per_h - x.speed_deg_per_h)
                    .abs()
                    .total_cmp(&(c.speed_deg_per_h - y.speed_deg_per_h).abs())
            })
            .expect("Z0 at least");
        if (c.speed_deg_per_h - nearest.speed_deg_per_h).abs() >= need {
            chosen.push(c);
        } else {
            left_out.push((c.name, nearest.name));
        }
    }
    chosen.sort_by(|a, b| a.speed_deg_per_h.total_cmp(&b.speed_deg_per_h));
    (chosen, left_out)
}

/// Mirrors the upper triangle of a row-major `p × p` array into a matrix.
fn mirrored(upper: &[f64], p: usize) -> DMatrix<f64> {
    DMatrix::from_fn(p, p, |i, j| {
        if i <= j {
            upper[i * p + j]
        } else {
            upper[j * p + i]
        }
    })
}

/// AᵀA and Aᵀy from a row-major `a` (`p` columns), one rank-one update of the upper triangle per
/// row, on one thread.
fn normal_by_rows(a: &[f64], y: &[f64], p: usize) -> (DMatrix<f64>, DVector<f64>) {
    let mut upper = vec![0.0; p * p];
    let mut aty = DVector::<f64>::zeros(p);
    for (row, &yr) in a.chunks_exact(p).zip(y) {
        for i in 0..p {
            let ri = row[i];
            if ri == 0.0 {
                continue;
            }
            let dst = &mut upper[i * p + i..(i + 1) * p];
            for (d, &rj) in dst.iter_mut().zip(&row[i..]) {
                *d += ri * rj;
            }
            aty[i] += ri * yr;
        }
    }
    (mirrored(&upper, p), aty)
}

/// As [`normal_by_rows`], four rows per pass over the triangle (a quarter of the loads and
/// stores of the triangle), the remaining rows one at a time. `solve` does this on blocks of rows
/// spread over all cores.
fn normal_by_rows4(a: &[f64], y: &[f64], p: usize) -> (DMatrix<f64>, DVector<f64>) {
    let mut upper = vec![0.0; p * p];
    let mut aty = DVector::<f64>::zeros(p);
    let blocks = a.chunks_exact(4 * p);
    let rest = blocks.remainder();
    for (b, ys) in blocks.zip(y.chunks_exact(4)) {
        let (r0, r1, r2, r3) = (&b[..p], &b[p..2 * p], &b[2 * p..3 * p], &b[3 * p..]);
        for i in 0..p {
            let (c0, c1, c2, c3) = (r0[i], r1[i], r2[i], r3[i]);
            let dst = &mut upper[i * p + i..(i + 1) * p];
            for (j, d) in (i..p).zip(dst.iter_mut()) {
                *d += c0 * r0[j] + c1 * r1[j] + c2 * r2[j] + c3 * r3[j];
            }
            aty[i] += c0 * ys[0] + c1 * ys[1] + c2 * ys[2] + c3 * ys[3];
        }
    }
    let done = y.len() - rest.len() / p;
    for (row, &yr) in rest.chunks_exact(p).zip(&y[done..]) {
        for i in 0..p {
            let dst = &mut upper[i * p + i..(i + 1) * p];
            for (d, &rj) in dst.iter_mut().zip(&row[i..]) {
                *d += row[i] * rj;
            }
            aty[i] += row[i] * yr;
        }
    }
    (mirrored(&upper, p), aty)
}

/// Residuals `y − A x` of a row-major `a`, as `solve` computes them.
fn residuals_by_rows(a: &[f64], y: &[f64], x: &[f64]) -> DVector<f64> {
    let p = x.len();
    DVector::from_iterator(
        y.len(),
        a.chunks_exact(p)
            .zip(y)
            .map(|(row, &yr)| yr - row.iter().zip(x).map(|(r, c)| r * c).sum::<f64>()),
    )
}

/// AᵀA by general matrix products (nalgebra's gemm, matrixmultiply) of a transposed copy of `a`,
/// one block of `w` columns at a time, each only against the columns up to its own (upper
/// triangle), mirrored.
fn upper_by_gemm_blocks(a: &DMatrix<f64>, w: usize) -> DMatrix<f64> {
    let p = a.ncols();
    let at = a.transpose();
    let mut m = DMatrix::<f64>::zeros(p, p);
    let mut j0 = 0;
    while j0 < p {
        let wj = w.min(p - j0);
        let j1 = j0 + wj;
        let block = at.rows(0, j1) * a.columns(j0, wj);
        m.view_mut((0, j0), (j1, wj)).copy_from(&block);
        j0 = j1;
    }
    for j in 0..p {
        for i in (j + 1)..p {
            m[(i, j)] = m[(j, i)];
        }
    }
    m
}

/// Runs an `ebbwise` command with its standard output to /dev/null and its summary (standard
/// error) kept, and asserts that it succeeded; the summary is shown only when it did not.
fn run_quietly(cmd: &mut Command) {
    let out = cmd
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .output()
        .expect("ebbwise starts");
    let subcommand = cmd.get_args().next().unwrap_or_default().to_string_lossy();
    assert!(
        out.status.success(),
        "ebbwise {subcommand}: {}\n{}",
        out.status,
        String::from_utf8_lossy(&out.stderr)
    );
}

/// The defaults of `--runs`, `--retries` (per run) and `--wait-idle` (before each measurement
/// and before a run is repeated).
const DEFAULTS: Runner = Runner {
    runs: 11,
    retries: 3,
    wait_idle_s: 60,
};

const USAGE: &str =
    "usage: cargo bench --bench harmonics [-- [--runs K] [--retries R] [--wait-idle SECONDS]]";

fn main() {
    let runner = DEFAULTS.with_args(USAGE, |_, _| false);
    let ebbwise = common::ebbwise_binary().unwrap_or_else(|e| panic!("{e}"));
    common::warn_if_stale(&ebbwise);
    let repo = Path::new(env!("CARGO_MANIFEST_DIR"));
    let record = repo.join(RECORD);

    // The record, read as ebbwise analyse reads it (QC aside).
    let mut spec = GaugeSpec::for_record(&record, HeightUnit::Metre, 0.0);
    spec.time_column = "time_utc".into();
    spec.height_column = "height_m".into();
    let r = read_gauge_record(&spec, None).expect("the benchmark record");
    let series = r.increasing_series();
    let (times_s, heights_m) = (series.times_s, series.heights_m);
    let length_h = (times_s[times_s.len() - 1] - times_s[0]) / 3600.0;

    let (list, left_out) = separable_constituents(length_h, RAYLEIGH_FACTOR);
    let names: Vec<String> = list.iter().map(|c| c.name.to_string()).collect();
    let settings = AnalysisSettings {
        constituents: Some(names.clone()),
        ..AnalysisSettings::default()
    };
    let centre = AnalysisSettings {
        nodal: NodalMode::Centre,
        ..settings.clone()
    };
    let auto = AnalysisSettings::default();

    println!(
        "Harmonic analysis of a one-year hourly record and a 19-year 6-minute prediction; {} runs \
         of each measurement (medians)",
        runner.runs
    );
    println!("  machine  {}", common::machine_and_load());
    println!(
        "  record   {RECORD}: {} samples over {length_h:.0} h",
        times_s.len()
    );
    println!(
        "  analysis {} constituents separable at Rayleigh factor {RAYLEIGH_FACTOR} ({:.4} °/h): \
         {}",
        list.len(),
        RAYLEIGH_FACTOR * 360.0 / length_h,
        names.join(" ")
    );
    println!(
        "           left out: {}",
        left_out
            .iter()
            .map(|(c, n)| format!("{c} (near {n})"))
            .collect::<Vec<_>>()
            .join(", ")
    );
    println!("  ebbwise     {}", ebbwise.display());
    println!();

    let mut rows: Vec<Timed> = Vec::new();

    // 1. Analysis in this process.
    let (t, d) = runner.measure(
        &format!(
            "design: {} constituents, nodal per sample (with AᵀA, Aᵀy)",
            list.len()
        ),
        || design(&times_s, &heights_m, &settings).expect("design"),
    );
    let (unknowns, samples) = (d.unknowns(), d.samples());
    rows.push(t);
    let (t, an) = runner.measure(
        "solve: Cholesky, residual pass, spectrum, covariance",
        || solve(&d).expect("solve (not singular)"),
    );
    let t_solve = t.median_s;
    rows.push(t);
    let (t, _) = runner.measure("analyse (design + solve), nodal per sample", || {
        analyse(&times_s, &heights_m, &settings).expect("analyse")
    });
    let t_analyse = t.median_s;
    rows.push(t);
    let (t, dc) = runner.measure(
        &format!("design: {} constituents, nodal at the centre", list.len()),
        || design(&times_s, &heights_m, &centre).expect("design"),
    );
    rows.push(t);
    let (t, _) = runner.measure("solve, nodal at the centre", || {
        solve(&dc).expect("solve (not singular)")
    });
    rows.push(t);
    let (t, _) = runner.measure("analyse (design + solve), nodal at the centre", || {
        analyse(&times_s, &heights_m, &centre).expect("analyse")
    });
    rows.push(t);
    drop(dc);
    let (t, an_auto) = runner.measure(
        "analyse, automatic choice (ebbwise analyse default)",
        || analyse(&times_s, &heights_m, &auto).expect("analyse"),
    );
    let auto_fitted = an_auto
        .fitted
        .iter()
        .filter(|f| f.inferred_from.is_none())
        .count();
    rows.push(t);
    assert_eq!(unknowns, 1 + 2 * list.len());
    assert_eq!(an.fitted.len(), list.len());
    for (c, h) in [("M2", 1.20), ("S2", 0.42), ("N2", 0.24), ("K1", 0.16)] {
        assert!(
            (an.amplitude(c) - h).abs() < 0.002,
            "{c}: {} m, expected about {h} m",
            an.amplitude(c)
        );
    }

    // 2. What the solve spends its time on: the same operations on a matrix of the same shape,
    // and other ways of forming the normal equations.
    let n_solve_rows = rows.len();
    let t0 = times_s[0];
    let a = DMatrix::<f64>::from_fn(samples, unknowns, |i, j| {
        if j == 0 {
            return 1.0;
        }
        let w = list[(j - 1) / 2].speed_deg_per_h.to_radians() / 3600.0;
        let ph = w * (times_s[i] - t0);
        if j % 2 == 1 {
            ph.cos()
        } else {
            ph.sin()
        }
    });
    // Row-major, as `design` stores it: the column-major storage of Aᵀ.
    let a_rows = a.transpose();
    let a_rows = a_rows.as_slice();
    let y = DVector::from_column_slice(&heights_m);
    let (t, (ata, aty)) = runner.measure(
        "  AᵀA and Aᵀy, one row per pass over the upper triangle",
        || normal_by_rows(a_rows, &heights_m, unknowns),
    );
    rows.push(t);
    let close = |m: &DMatrix<f64>| (&ata - m).amax() < 1e-9 * ata.amax();
    let (t, m) = runner.measure("  the same, four rows per pass (one thread)", || {
        normal_by_rows4(a_rows, &heights_m, unknowns)
    });
    rows.push(t);
    assert!(close(&m.0) && (&aty - &m.1).amax() < 1e-9 * aty.amax());
    let (t, m) = runner.measure("  AᵀA by a.tr_mul(&a) (column dot products)", || {
        a.tr_mul(&a)
    });
    rows.push(t);
    assert!(close(&m));
    let (t, m) = runner.measure("  AᵀA by a.transpose() * &a (nalgebra gemm)", || {
        a.transpose() * &a
    });
    rows.push(t);
    assert!(close(&m));
    let (t, m) = runner.measure(
        "  AᵀA upper triangle, gemm by blocks of 16 columns",
        || upper_by_gemm_blocks(&a, 16),
    );
    rows.push(t);
    assert!(close(&m));
    let (t, chol) = runner.measure("  Cholesky of AᵀA", || {
        ata.clone().cholesky().expect("positive definite")
    });
    rows.push(t);
    let (t, x) = runner.measure("  chol.solve(&aty)", || chol.solve(&aty));
    rows.push(t);
    let (t, _) = runner.measure("  residuals y − A x, row by row", || {
        residuals_by_rows(a_rows, &heights_m, x.as_slice())
    });
    rows.push(t);
    let (t, _) = runner.measure("  chol.inverse() (covariance)", || chol.inverse());
    rows.push(t);
    drop((a, y, ata, chol, m));

    // 3. Prediction in this process: the largest constituents of the analysis.
    let mut big = an.clone();
    big.fitted
        .sort_by(|x, y| y.amplitude_m.total_cmp(&x.amplitude_m));
    big.fitted.truncate(PREDICTION_CONSTITUENTS);
    big.fitted.sort_by(|x, y| {
        x.constituent
            .speed_deg_per_h
            .total_cmp(&y.constituent.speed_deg_per_h)
    });
    let k: HarmonicConstants = big.constants();
    let (t, h) = runner.measure(
        "predict_grid: 19 years every 6 min, 37 constituents",
        || predict_grid(&k, PREDICTION_T0_S, PREDICTION_STEP_S, PREDICTION_N),
    );
    let t_grid = t.median_s;
    rows.push(t);
    let (t, ex) = runner.measure("high_low_waters: high and low waters of that grid", || {
        high_low_waters(&k, PREDICTION_T0_S, PREDICTION_STEP_S, &h)
    });
    let t_high_low_waters = t.median_s;
    rows.push(t);
    assert_eq!(h.len(), PREDICTION_N);
    let highs = ex.iter().filter(|e| e.high).count();
    // About 705 high and 705 low waters a year for a semidiurnal tide.
    assert!(
        (13_000..14_000).contains(&highs) && (13_000..14_000).contains(&(ex.len() - highs)),
        "{highs} high and {} low waters",
        ex.len() - highs
    );
    drop(h);

    // 4. Whole processes.
    let dir = tempfile::tempdir().expect("a temporary folder");
    let out_toml = dir.path().join("record_1y.constants.toml");
    let analyse_cmd = |extra: &[&str]| {
        run_quietly(
            Command::new(&ebbwise)
                .arg("analyse")
                .arg(&record)
                .args(["--time-column", "time_utc", "--height-column", "height_m"])
                .args(extra)
                .arg("--out")
                .arg(&out_toml),
        )
    };
    let (t, ()) = runner.measure(
        "ebbwise analyse RECORD (whole process, automatic choice)",
        || analyse_cmd(&[]),
    );
    let t_process_auto = t.median_s;
    rows.push(t);
    let file = fs::read_to_string(&out_toml).expect("the constants file");
    assert_eq!(
        file.matches("[[constituent]]").count(),
        an_auto.fitted.len(),
        "constituents in the constants file"
    );
    let list_arg = names.join(",");
    let (t, ()) = runner.measure(
        &format!("ebbwise analyse RECORD --constituents <the {}>", list.len()),
        || analyse_cmd(&["--constituents", &list_arg]),
    );
    rows.push(t);
    let file = fs::read_to_string(&out_toml).expect("the constants file");
    assert_eq!(file.matches("[[constituent]]").count(), list.len());

    let constants = dir.path().join("big37.constants.toml");
    fs::write(
        &constants,
        ConstantsFile::from_analysis(&big, Some(RECORD.into()), None, "above the record's zero")
            .to_toml(),
    )
    .expect("write the constants");
    let pred = dir.path().join("pred.csv");
    let pred_ex = dir.path().join("pred.high-low-waters.csv");
    let (t, ()) = runner.measure(
        "ebbwise predict: 19 years every 6 min, files written",
        || {
            for p in [&pred, &pred_ex] {
                let _ = fs::remove_file(p);
            }
            run_quietly(
                Command::new(&ebbwise)
                    .arg("predict")
                    .arg(&constants)
                    .args(["--from", PREDICTION_FROM, "--to", PREDICTION_TO])
                    .args(["--step-min", "6"])
                    .arg("--out")
                    .arg(&pred)
                    .arg("--high-low-waters")
                    .arg(&pred_ex),
            );
        },
    );
    let t_predict_process = t.median_s;
    rows.push(t);
    let mut compute_s = Vec::new();
    let t_last_s = PREDICTION_T0_S + (PREDICTION_N - 1) as f64 * PREDICTION_STEP_S;
    let (t, ()) = runner.measure(
        "  predict_file (ebbwise predict's work, in this process)",
        || {
            let o = predict_file(
                &constants,
                PREDICTION_T0_S,
                t_last_s,
                PREDICTION_STEP_S,
                &pred,
                &pred_ex,
            )
            .expect("predict_file");
            assert_eq!(o.n, PREDICTION_N);
            compute_s.push(o.compute_s);
        },
    );
    let t_predict_file = t.median_s;
    rows.push(t);
    let compute_median_s = common::median(compute_s);
    let pred_mib = fs::metadata(&pred).map(|m| m.len()).unwrap_or(0) as f64 / 1048576.0;
    let pred_lines = fs::read_to_string(&pred)
        .expect("the prediction")
        .lines()
        .count();
    assert_eq!(pred_lines, PREDICTION_N + 1, "lines of the prediction");
    let ex_lines = fs::read_to_string(&pred_ex)
        .expect("the high and low waters")
        .lines()
        .count();

    println!(
        "  {:<62} {:>10} {:>10} {:>10} {:>10}",
        "measurement", "median ms", "min ms", "CPU ms", "disturbed"
    );
    for (i, t) in rows.iter().enumerate() {
        if i == n_solve_rows {
            println!(
                "  the steps of solve, on one thread, on an equivalent {samples} × {unknowns} \
                 matrix:"
            );
        }
        println!(
            "  {:<62} {:>10.2} {:>10.2} {:>10.2} {:>10}",
            t.label,
            t.median_s * 1e3,
            t.min_s * 1e3,
            t.cpu_median_s * 1e3,
            format!("{}/{}", t.disturbed, t.discarded)
        );
    }
    println!();
    println!(
        "  CPU ms: median CPU time of the measured work (this process and its children). \
         disturbed: kept runs during which other processes used more than \
         {DISTURBED_OTHER_CPU_PER_WALL} CPU-s per s / disturbed runs discarded and run again."
    );
    println!(
        "  analysis: {samples} samples, {unknowns} unknowns (Z0 + 2 × {}); residual RMS {:.4} m; \
         the automatic choice fits {auto_fitted} constituents ({} inferred)",
        list.len(),
        an.residual_rms_m,
        an_auto.fitted.len() - auto_fitted
    );
    println!(
        "  prediction: {PREDICTION_N} values, {} constituents ({} … {}), {highs} high and {} low \
         waters; prediction file {pred_mib:.1} MiB, high-low-water file {} lines",
        k.constituents.len(),
        k.constituents[0].0.name,
        k.constituents[k.constituents.len() - 1].0.name,
        ex.len() - highs,
        ex_lines
    );
    let verdict = |ok: bool| if ok { "met" } else { "NOT met" };
    println!(
        "  target: least-squares solve < {} ms: {} ({}); the target was set when solve summed the \
         normal equations, which design now does while it builds the rows; solve now rebuilds the \
         rows for the residual and takes its spectrum (coloured-noise uncertainties); the whole \
         analysis, design + solve, {}",
        TARGET_SOLVE_S * 1e3,
        ms(t_solve),
        verdict(t_solve < TARGET_SOLVE_S),
        ms(t_analyse)
    );
    println!(
        "  target: prediction < {} s: predict_grid + high_low_waters {} ({}); whole ebbwise predict \
         process with files {}",
        TARGET_PREDICTION_S,
        ms(t_grid + t_high_low_waters),
        verdict(t_grid + t_high_low_waters < TARGET_PREDICTION_S),
        ms(t_predict_process)
    );
    println!(
        "  predict_file in this process {}: predict_grid + high_low_waters {} (its own clock), the rest \
         ({}) reading the constants, formatting and writing {pred_mib:.1} MiB (synced)",
        ms(t_predict_file),
        ms(compute_median_s),
        ms(t_predict_file - compute_median_s)
    );
    println!(
        "  ebbwise analyse (whole process, automatic choice) {}: for the 20× comparison with UTide run \
         bash tests/reference/harmonics/bench_side_by_side.sh",
        ms(t_process_auto)
    );
    println!("  load average after: {}", common::load_average());
}
