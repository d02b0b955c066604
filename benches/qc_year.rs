//! Quality control of a one-year 1-minute gauge record (525 600 samples): `run_qc` alone, the
//! reducer's per-gauge preparation (`prepare_series`) and the whole `ebbwise qc --record` process.
//!
//! ```text
//! cargo build --release --bin ebbwise
//! cargo bench --bench qc_year                 # 7 rounds
//! cargo bench --bench qc_year -- --runs 11 --retries 5 --wait-idle 0
//! ```
//!
//! The record: 2026-01-01T00:00Z onwards, one sample a minute for 365 days, a tide of M2 1.5 m,
//! S2 0.5 m, N2 0.3 m, K1 0.15 m and O1 0.1 m around a mean level of 2.5 m above chart datum,
//! plus Gaussian noise of σ 1 cm (ChaCha8, fixed seed), rounded to 1 mm. Planted faults: four
//! single-sample spikes, a stuck sensor (3 hours of one repeated reading) and a level shift of
//! 0.10 m lasting a week (a step up and a step down). The bench asserts that every planted fault
//! is found and that few other samples are flagged, so a broken run cannot pass as a fast one.
//!
//! Measured, as medians over `--runs` rounds (default 7; each round runs every measurement once,
//! in the order below, so that a drift in the machine's speed touches all of them alike): wall
//! time (`Instant`) and CPU time of this process and its children (`getrusage`).
//!
//! 1. `ebbwise::compute::qc::run_qc` on the samples in memory;
//! 2. `ebbwise::run::load::prepare_series` with QC on: linear interpolation, a 10-min low-pass,
//!    a forced not-a-knot cubic spline, and both;
//! 3. the phases of `ebbwise qc --record` in this process: reading the CSV
//!    (`read_gauge_record`), writing `<stem>.qc.csv` and `<stem>.qc.svg` (`write_gauge_qc`), and
//!    rendering the SVG alone (the QC phase is measurement 2, linear);
//! 4. the whole `ebbwise qc --record FILE --out DIR` child process (`<target>/release/ebbwise`; its
//!    output folder is deleted first), started through a small helper (this executable again,
//!    `--child-rss`) that reports its peak resident set from `wait4`: started from the bench
//!    itself, the child's `ru_maxrss` would include the bench's own memory.
//!
//! Before the first round it waits (at most `--wait-idle` seconds, default 20; 0 to skip) until
//! the machine has been idle for 3 s. A run during which other processes used more than 0.1
//! CPU-second per second (from /proc/stat, minus this process and its children) is disturbed:
//! it is discarded and run again after another wait, at most `--retries` times per measurement
//! (default 3); the table counts the disturbed runs kept and discarded.
//!
//! `--profile-run-qc K` runs only `run_qc`, K times, for a profiler:
//! `perf record target/release/deps/qc_year-<hash> --profile-run-qc 20`.
//!
//! The record is written as CSV (`time,height`, RFC 3339 UTC times) to a temporary folder (the
//! system's temporary directory). The ebbwise binary is not built here: build it first with
//! `cargo build --release --bin ebbwise`.

use std::fmt::Write as _;
use std::fs;
use std::hint::black_box;
use std::io::{BufWriter, Write};
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Instant;

use ebbwise::compute::qc::{run_qc, QcFlag, QcResult};
use ebbwise::io::gauge_csv::read_gauge_record;
use ebbwise::io::project::{GaugeSpec, HeightUnit, InterpolationChoice, InterpolationSpec, QcSpec};
use ebbwise::io::qc_svg::{render_qc_svg, QcPlot};
use ebbwise::run::load::{prepare_series, PreparedSeries};
use ebbwise::run::qc::write_gauge_qc;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

mod common;
use common::{Run, Runner, Timed, DISTURBED_OTHER_CPU_PER_WALL};

/// Samples in the record: 365 days of 1-minute samples.
const N_SAMPLES: usize = 365 * 1440;
/// Sample interval, seconds.
const STEP_S: f64 = 60.0;
/// First sample: 2026-01-01T00:00:00Z, seconds since 1970-01-01.
const FIRST_TIME_S: f64 = 1_767_225_600.0;
/// Mean level above chart datum, metres.
const MEAN_LEVEL_M: f64 = 2.5;
/// Standard deviation of the noise, metres.
const NOISE_SIGMA_M: f64 = 0.01;
/// Seed of the noise generator.
const SEED: u64 = 2026;
/// Low-pass cut-off period for the filtered preparation, minutes.
const LOWPASS_CUTOFF_MIN: f64 = 10.0;

/// Planted spikes: (sample index, offset in metres).
const SPIKES: [(usize, f64); 4] = [
    (50_000, 0.40),
    (150_000, -0.35),
    (300_000, 0.60),
    (450_000, -0.50),
];
/// Planted flat line: samples `FLAT.0 .. FLAT.1` all read the level of sample `FLAT.0` (3 hours).
const FLAT: (usize, usize) = (200_000, 200_180);
/// Planted level shift: samples `SHIFT.0 .. SHIFT.1` (one week) read `SHIFT_M` too high.
const SHIFT: (usize, usize) = (350_000, 350_000 + 7 * 1440);
const SHIFT_M: f64 = 0.10;
/// Samples flagged further than this from every planted fault are false alarms.
const FAULT_REACH_SAMPLES: usize = 180;
/// Most false alarms accepted (the defaults aim at fewer than one per year of clean record).
const MAX_FALSE_ALARMS: usize = 10;

/// Constituents: (amplitude m, speed °/h, phase lag °). Speeds from the constituent table.
const CONSTITUENTS: [(f64, f64, f64); 5] = [
    (1.5, 28.984_104_2, 40.0),   // M2
    (0.5, 30.0, 75.0),           // S2
    (0.3, 28.439_729_5, 20.0),   // N2
    (0.15, 15.041_068_6, 200.0), // K1
    (0.1, 13.943_035_6, 180.0),  // O1
];

fn tide_m(t_s: f64) -> f64 {
    let hours = (t_s - FIRST_TIME_S) / 3600.0;
    MEAN_LEVEL_M
        + CONSTITUENTS
            .iter()
            .map(|&(a_m, speed_deg_per_h, g_deg)| {
                a_m * (speed_deg_per_h * hours - g_deg).to_radians().cos()
            })
            .sum::<f64>()
}

/// The record: times (UTC s) and levels (m above chart datum, 1 mm resolution), faults planted.
fn make_record() -> (Vec<f64>, Vec<f64>) {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(SEED);
    let noise = Normal::new(0.0, NOISE_SIGMA_M).expect("valid σ");
    let times_s: Vec<f64> = (0..N_SAMPLES)
        .map(|i| FIRST_TIME_S + i as f64 * STEP_S)
        .collect();
    let mut heights_m: Vec<f64> = times_s
        .iter()
        .map(|&t| tide_m(t) + noise.sample(&mut rng))
        .collect();
    for &(i, dh_m) in &SPIKES {
        heights_m[i] += dh_m;
    }
    let stuck_m = heights_m[FLAT.0];
    for h in &mut heights_m[FLAT.0..FLAT.1] {
        *h = stuck_m;
    }
    for h in &mut heights_m[SHIFT.0..SHIFT.1] {
        *h += SHIFT_M;
    }
    for h in &mut heights_m {
        *h = (*h * 1000.0).round() / 1000.0;
    }
    (times_s, heights_m)
}

/// Asserts that every planted fault is flagged and that few other samples are. Returns the
/// number of samples flagged away from the planted faults.
fn check_faults(q: &QcResult, what: &str) -> usize {
    for &(i, dh_m) in &SPIKES {
        assert!(
            q.flags[i].contains(QcFlag::Spike),
            "{what}: the planted spike of {dh_m:+} m at sample {i} is not flagged (flags: {})",
            q.flags[i].label()
        );
    }
    for i in FLAT.0 + 1..FLAT.1 {
        assert!(
            q.flags[i].contains(QcFlag::FlatLine),
            "{what}: sample {i} of the planted flat line is not flagged (flags: {})",
            q.flags[i].label()
        );
    }
    assert!(
        q.flags[SHIFT.0].contains(QcFlag::LevelShift),
        "{what}: the planted step up at sample {} is not flagged (flags: {})",
        SHIFT.0,
        q.flags[SHIFT.0].label()
    );
    // The step back is flagged on its first sample, or ends the offset that is set aside (its
    // last sample flagged): either way one of the two samples at the junction carries the flag.
    // Were it missed, a set-aside offset would run on to the record's end, which the false-alarm
    // count below catches.
    assert!(
        q.flags[SHIFT.1 - 1].contains(QcFlag::LevelShift)
            || q.flags[SHIFT.1].contains(QcFlag::LevelShift),
        "{what}: the planted step back at sample {} is not flagged (flags: {} | {})",
        SHIFT.1,
        q.flags[SHIFT.1 - 1].label(),
        q.flags[SHIFT.1].label()
    );
    let near_fault = |i: usize| {
        let near =
            |a: usize, b: usize| i + FAULT_REACH_SAMPLES >= a && i <= b + FAULT_REACH_SAMPLES;
        SPIKES.iter().any(|&(s, _)| near(s, s)) || near(FLAT.0, FLAT.1) || near(SHIFT.0, SHIFT.1)
    };
    let false_alarms = (0..q.flags.len())
        .filter(|&i| q.flags[i].0 != 0 && !near_fault(i))
        .count();
    assert!(
        false_alarms <= MAX_FALSE_ALARMS,
        "{what}: {false_alarms} samples flagged away from the planted faults (at most \
         {MAX_FALSE_ALARMS} expected)"
    );
    false_alarms
}

/// Writes the record as `time,height` CSV with RFC 3339 UTC times.
fn write_csv(path: &Path, times_s: &[f64], heights_m: &[f64]) {
    let file = fs::File::create(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let mut w = BufWriter::with_capacity(1 << 20, file);
    let mut line = String::with_capacity(64);
    w.write_all(b"time,height\n").unwrap();
    for (&t, &h) in times_s.iter().zip(heights_m) {
        line.clear();
        let dt = chrono::DateTime::from_timestamp(t as i64, 0).expect("time in range");
        let _ = writeln!(line, "{},{h:.3}", dt.format("%Y-%m-%dT%H:%M:%SZ"));
        w.write_all(line.as_bytes()).unwrap();
    }
    w.flush().unwrap();
}

/// One measurement: its label and the work, which keeps its own last result.
type Task<'a> = (String, Box<dyn FnMut() + 'a>);

impl Runner {
    /// Times every task over `self.runs` rounds; each round runs every task once, in order, so
    /// that a drift in the machine's speed touches all measurements alike. Waits for an idle
    /// machine first; a disturbed run is run again after another wait, at most `self.retries`
    /// times per task.
    fn measure_interleaved(&self, tasks: &mut [Task]) -> Vec<Timed> {
        self.wait_for_idle();
        let mut kept: Vec<Vec<Run>> = vec![Vec::with_capacity(self.runs); tasks.len()];
        let mut disturbed = vec![0; tasks.len()];
        let mut discarded = vec![0; tasks.len()];
        for _ in 0..self.runs {
            for (k, (_, f)) in tasks.iter_mut().enumerate() {
                loop {
                    let (run, ()) = common::time_run(&mut *f);
                    let is_disturbed = common::disturbed(run.other_cpu_s, run.wall_s, 0.0);
                    if is_disturbed && discarded[k] < self.retries {
                        discarded[k] += 1;
                        self.wait_for_idle();
                        continue;
                    }
                    disturbed[k] += usize::from(is_disturbed);
                    kept[k].push(run);
                    break;
                }
            }
        }
        tasks
            .iter()
            .enumerate()
            .map(|(k, (label, _))| Timed::new(label.clone(), &kept[k], disturbed[k], discarded[k]))
            .collect()
    }
}

/// Hidden mode `--child-rss PROGRAM ARGS…`: runs the program (output to /dev/null) and prints
/// its exit code and peak resident set in KiB (`ru_maxrss` from `wait4`).
///
/// The child's summary (standard error) is discarded: the exit code, which the parent checks,
/// says whether it ran. The program is started from this small process, not from the bench
/// itself: a child started
/// with `vfork` semantics (as `Command` does) shares its parent's memory until `exec`, and Linux
/// counts the parent's resident set in the child's `ru_maxrss`.
fn child_rss(args: Vec<String>) {
    let r = common::run_child(
        Command::new(&args[0])
            .args(&args[1..])
            .stdout(Stdio::null())
            .stderr(Stdio::null()),
    )
    .unwrap_or_else(|e| panic!("{e}"));
    println!("{} {}", r.exit_code.unwrap_or(-1), r.peak_rss_kib);
}

/// Runs `program args…` through `--child-rss`; returns its exit code and peak RSS in KiB.
fn run_with_rss(program: &Path, args: &[&std::ffi::OsStr]) -> (i32, i64) {
    let this = common::this_exe().unwrap_or_else(|e| panic!("{e}"));
    let out = Command::new(this)
        .arg("--child-rss")
        .arg(program)
        .args(args)
        .stderr(Stdio::inherit())
        .output()
        .expect("the helper starts");
    assert!(out.status.success(), "the --child-rss helper failed");
    let text = String::from_utf8_lossy(&out.stdout);
    let mut words = text
        .split_whitespace()
        .map(|w| w.parse::<i64>().expect("number"));
    (
        words.next().expect("exit code") as i32,
        words.next().expect("peak RSS"),
    )
}

/// The defaults: `--runs` 7 rounds (each runs every measurement once), `--retries` 3 disturbed
/// runs discarded and run again per measurement, `--wait-idle` 20 s at most for an idle machine
/// before the first round and before a repeated run.
const DEFAULTS: Runner = Runner {
    runs: 7,
    retries: 3,
    wait_idle_s: 20,
};

const USAGE: &str = "usage: cargo bench --bench qc_year \
    [-- [--runs K] [--retries R] [--wait-idle SECONDS] | --profile-run-qc K]";

fn main() {
    if std::env::args().nth(1).as_deref() == Some("--child-rss") {
        child_rss(std::env::args().skip(2).collect());
        return;
    }
    let mut profile_run_qc = None;
    let runner = DEFAULTS.with_args(USAGE, |option, number| {
        let known = option == "--profile-run-qc";
        if known {
            profile_run_qc = Some(number("runs"));
        }
        known
    });
    let (times_s, heights_m) = make_record();
    if let Some(k) = profile_run_qc {
        profile_only_run_qc(k, &times_s, &heights_m);
        return;
    }
    let ebbwise = common::ebbwise_binary().unwrap_or_else(|e| panic!("{e}"));
    common::warn_if_stale(&ebbwise);

    let dir = tempfile::tempdir().expect("a temporary folder");
    let csv = dir.path().join("year.csv");
    write_csv(&csv, &times_s, &heights_m);
    let csv_mib = fs::metadata(&csv).map(|m| m.len()).unwrap_or(0) as f64 / 1048576.0;

    let mut gauge = GaugeSpec::for_record(&csv, HeightUnit::Metre, 0.0);
    gauge.mean_level_above_datum_m = MEAN_LEVEL_M;
    // The record as `ebbwise qc --record` reads it, checked against the generated samples.
    let record = read_gauge_record(&gauge, None).expect("readable");
    assert_eq!(record.times_s, times_s, "the CSV changed the times");
    assert_eq!(record.heights_m, heights_m, "the CSV changed the levels");
    let qc_spec = QcSpec::default();
    let interp = InterpolationSpec::default();
    let thresholds = qc_spec.thresholds_for(&gauge);
    let band_m = (thresholds.band_min_m, thresholds.band_max_m);
    // The QC result the write phases format (prepared once, outside the timing).
    let prepared = prepare_series(&qc_spec, &interp, &gauge, &record);
    let pq = prepared.qc.clone().expect("QC is on");
    check_faults(&pq, "prepare_series for the write phase");

    println!(
        "QC of a one-year 1-minute record: {N_SAMPLES} samples, {} rounds (each runs every \
         measurement once)",
        runner.runs
    );
    println!("  machine  {}", common::machine_and_load());
    println!("  record   {} ({csv_mib:.1} MiB)", csv.display());
    println!("  ebbwise     {}", ebbwise.display());
    println!();

    // The measurements. Each keeps its last result, checked after the rounds.
    let prepare_variants = [
        (
            "prepare_series: QC, linear",
            None,
            InterpolationChoice::Linear,
        ),
        (
            "prepare_series: QC, 10-min low-pass, linear",
            Some(LOWPASS_CUTOFF_MIN),
            InterpolationChoice::Linear,
        ),
        (
            "prepare_series: QC, cubic spline",
            None,
            InterpolationChoice::Cubic,
        ),
        (
            "prepare_series: QC, 10-min low-pass, cubic spline",
            Some(LOWPASS_CUTOFF_MIN),
            InterpolationChoice::Cubic,
        ),
    ];
    let prepare_gauges: Vec<GaugeSpec> = prepare_variants
        .iter()
        .map(|&(_, lowpass, interpolation)| {
            let mut g = gauge.clone();
            g.lowpass_cutoff_min = lowpass;
            g.interpolation = interpolation;
            g
        })
        .collect();
    let mut last_qc = None;
    let mut last_prepared: Vec<Option<PreparedSeries>> =
        prepare_variants.iter().map(|_| None).collect();
    let mut last_read = None;
    let mut last_write = None;
    let mut last_svg = None;
    let out_phase = dir.path().join("out-phase");
    let out = dir.path().join("out");
    let mut exit_codes = Vec::new();
    let mut peak_rss_kib = 0;

    let mut tasks: Vec<Task> = Vec::new();
    tasks.push((
        "run_qc".into(),
        Box::new(|| last_qc = Some(run_qc(&times_s, &heights_m, &thresholds))),
    ));
    for ((label, _, _), (g, slot)) in prepare_variants
        .iter()
        .zip(prepare_gauges.iter().zip(last_prepared.iter_mut()))
    {
        let (qc_spec, interp, record) = (&qc_spec, &interp, &record);
        tasks.push((
            label.to_string(),
            Box::new(move || *slot = Some(prepare_series(qc_spec, interp, g, record))),
        ));
    }
    tasks.push((
        "phase: read the CSV (read_gauge_record)".into(),
        Box::new(|| last_read = Some(read_gauge_record(&gauge, None).expect("readable"))),
    ));
    tasks.push((
        "phase: write .qc.csv + .qc.svg (write_gauge_qc)".into(),
        Box::new(|| {
            last_write = Some(
                write_gauge_qc(
                    &gauge,
                    &record,
                    &pq,
                    prepared.method.clone(),
                    band_m,
                    true,
                    &out_phase,
                )
                .expect("written"),
            )
        }),
    ));
    tasks.push((
        "phase: render the SVG alone".into(),
        Box::new(|| {
            last_svg = Some(render_qc_svg(&QcPlot {
                title: "year",
                times_s: &record.times_s,
                heights_m: &record.heights_m,
                flags: &pq.flags,
                band_m,
                levels_above_datum: true,
            }))
        }),
    ));
    // The whole process; its output folder is removed first (inside the timing, a few ms).
    tasks.push((
        "ebbwise qc --record (whole process)".into(),
        Box::new(|| {
            if out.exists() {
                fs::remove_dir_all(&out).expect("remove the previous output");
            }
            let (code, rss_kib) = run_with_rss(
                &ebbwise,
                &[
                    "qc".as_ref(),
                    "--record".as_ref(),
                    csv.as_os_str(),
                    "--out".as_ref(),
                    out.as_os_str(),
                ],
            );
            peak_rss_kib = peak_rss_kib.max(rss_kib);
            exit_codes.push(code);
        }),
    ));
    let rows = runner.measure_interleaved(&mut tasks);
    drop(tasks);

    // Checks of the last results.
    let q = last_qc.expect("run_qc ran");
    let false_alarms = check_faults(&q, "run_qc");
    for (&(label, _, interpolation), p) in prepare_variants.iter().zip(&last_prepared) {
        let p = p.as_ref().expect("prepare_series ran");
        check_faults(p.qc.as_ref().expect("QC is on"), label);
        assert_eq!(
            p.series.spline_m_per_s2.len() == p.series.times_s.len(),
            interpolation == InterpolationChoice::Cubic,
            "{label}: spline presence"
        );
    }
    let read = last_read.expect("read ran");
    assert_eq!(read.heights_m, heights_m, "read_gauge_record: levels");
    assert_eq!(
        last_write.expect("write ran").samples,
        N_SAMPLES,
        "write_gauge_qc: samples"
    );
    let svg_kib = last_svg.expect("SVG rendered").len() as f64 / 1024.0;
    let qc_csv_mib = fs::metadata(out_phase.join("year.qc.csv"))
        .map(|m| m.len())
        .unwrap_or(0) as f64
        / 1048576.0;
    // 1: samples flagged (the planted faults), as it should be.
    assert!(
        exit_codes.iter().all(|&c| c == 1),
        "ebbwise qc --record exit codes {exit_codes:?} (1 expected: samples flagged)"
    );
    // What the helper adds: its own start and a trivial child's.
    let floor_start = Instant::now();
    let (_, floor_rss_kib) = run_with_rss(Path::new("true"), &[]);
    let floor_s = floor_start.elapsed().as_secs_f64();
    // The last run's output: one row per sample, the same flag counts as run_qc.
    let text = fs::read_to_string(out.join("year.qc.csv")).expect("year.qc.csv");
    assert_eq!(text.lines().count(), N_SAMPLES + 1, "rows of year.qc.csv");
    let summary: serde_json::Value = serde_json::from_str(
        &fs::read_to_string(out.join("qc-summary.json")).expect("qc-summary.json"),
    )
    .expect("JSON");
    for f in QcFlag::ALL {
        assert_eq!(
            summary["gauges"][0]["flags"][f.as_str()].as_u64(),
            Some(q.count(f) as u64),
            "ebbwise qc --record: the {} count differs from run_qc's",
            f.as_str()
        );
    }
    assert!(out.join("year.qc.svg").is_file(), "year.qc.svg");
    let counts: Vec<String> = QcFlag::ALL
        .iter()
        .filter(|&&f| q.count(f) > 0)
        .map(|&f| format!("{} {}", f.as_str(), q.count(f)))
        .collect();

    println!(
        "  {:<52} {:>9} {:>9} {:>9} {:>10}",
        "measurement", "median s", "min s", "CPU s", "disturbed"
    );
    for t in &rows {
        println!(
            "  {:<52} {:>9.3} {:>9.3} {:>9.3} {:>10}",
            t.label,
            t.median_s,
            t.min_s,
            t.cpu_median_s,
            format!("{}/{}", t.disturbed, t.discarded)
        );
    }
    println!();
    println!(
        "  wall time of each kept run, in order, s (in brackets: CPU s other processes used \
         meanwhile):"
    );
    for t in &rows {
        let runs: Vec<String> = t
            .runs_s
            .iter()
            .zip(&t.others_s)
            .map(|(r, o)| format!("{r:.3} ({o:.2})"))
            .collect();
        println!("  {:<52} {}", t.label, runs.join(" "));
    }
    println!();
    println!(
        "  CPU s: median CPU time of the measured work (this process and its children). disturbed: \
         kept runs during which other processes used more than {DISTURBED_OTHER_CPU_PER_WALL} \
         CPU-s per s / disturbed runs discarded and run again."
    );
    println!(
        "  ebbwise qc --record: peak RSS {:.1} MiB (largest of the runs); year.qc.csv \
         {qc_csv_mib:.1} MiB; year.qc.svg {svg_kib:.0} KiB",
        peak_rss_kib as f64 / 1024.0,
    );
    println!(
        "  the process is started through a small helper (for a clean peak RSS); the helper \
         running `true` takes {:.1} ms and reports {:.1} MiB. Load average after: {}",
        floor_s * 1e3,
        floor_rss_kib as f64 / 1024.0,
        common::load_average()
    );
    println!(
        "  flags: {} (planted: {} spikes, a {}-sample flat line, 2 level-shift steps); \
         {false_alarms} flagged away from the planted faults",
        counts.join(", "),
        SPIKES.len(),
        FLAT.1 - FLAT.0
    );
    println!(
        "  robust σ of the spike residual {:.4} m; nominal step {:.1} min",
        q.robust_sigma_m,
        q.nominal_step_s / 60.0
    );
}

/// `--profile-run-qc K`: only `run_qc`, K times, for a profiler (`perf record` on the bench
/// executable); nothing else runs, so every sample past the record's generation is QC.
fn profile_only_run_qc(runs: u64, times_s: &[f64], heights_m: &[f64]) {
    let mut gauge = GaugeSpec::for_record(Path::new("year.csv"), HeightUnit::Metre, 0.0);
    gauge.mean_level_above_datum_m = MEAN_LEVEL_M;
    let thresholds = QcSpec::default().thresholds_for(&gauge);
    let start = Instant::now();
    for _ in 0..runs {
        let q = black_box(run_qc(times_s, heights_m, &thresholds));
        check_faults(&q, "run_qc");
    }
    println!(
        "run_qc: {runs} runs in {:.3} s ({:.3} s each)",
        start.elapsed().as_secs_f64(),
        start.elapsed().as_secs_f64() / runs.max(1) as f64
    );
}
