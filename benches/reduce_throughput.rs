//! Throughput and peak memory of `ebbwise reduce` on one large soundings file, against a baseline
//! that only copies the same file through the `csv` crate.
//!
//! ```text
//! cargo build --release --bin ebbwise
//! cargo bench --bench reduce_throughput                       # 5 000 000 soundings, 3 runs
//! cargo bench --bench reduce_throughput -- --soundings 20000000 --runs 3
//! ```
//!
//! What it does:
//!
//! 1. Generates (once, cached in `<target>/bench-data/n<N>/`) `soundings-v1.csv`: N rows in the
//!    layout of `zoning-demo/soundings/launch-a.csv` (`time,easting,northing,depth_m,line`, UTM
//!    24S metres, RFC 3339 UTC times). Row `i` takes the position, depth and line of launch-a row
//!    `i mod 53811` and moves the position by a deterministic offset of at most ±0.5 m on each
//!    axis; times run evenly from 2026-06-14T07:00Z to 17:00Z. Beside it, `project.toml`: the
//!    demo project's zoning, gauge, virtual-gauge, QC, interpolation, gap-filling and
//!    tide-field tables (absolute paths) and a single `[[soundings]]` group (the launch-a
//!    group's layout keys) naming the big file. `--demo-project FILE.toml` takes another demo
//!    project (e.g. `continuous.toml`), `--uncertainty` keeps its `[uncertainty]` table; other
//!    top-level tables are left out and named in the output.
//! 2. Runs, `--runs` times each and alternating, two child processes on that file:
//!    * **baseline**: this executable again (`--baseline-child IN OUT`), single-threaded: a
//!      `csv::Reader` with a reused `ByteRecord` (`read_byte_record`), the depth, easting and
//!      northing parsed as `f64`, every record written back with three float columns appended
//!      (depth, depth + 1, depth − 1, formatted with `ryu`) through a `csv::Writer` over a
//!      256 KiB `BufWriter`;
//!    * **ebbwise**: `<target>/release/ebbwise reduce <project> --out <dir> --no-progress`, run from a
//!      copy taken at the start (a rebuild during the benchmark cannot mix two builds).
//!
//!    Before each child it waits (at most `--wait-idle` seconds, default 60; 0 to skip) until
//!    the machine has been idle for 3 s. For each child: wall time (spawn to exit) and, from
//!    `wait4` on that child's pid, its own peak resident set (`ru_maxrss`) and CPU time; and the
//!    CPU time other processes used meanwhile (from /proc/stat), which flags a disturbed run.
//!    Outputs are checked (header + one line per sounding), then deleted before the next run.
//! 3. Prints medians, throughput and peak memory, the machine, and a Markdown table that is also
//!    written to `<target>/bench-data/results-n<N>.md`.
//!
//! The ebbwise binary is not built here: build it first with `cargo build --release --bin ebbwise`.

use std::fs::{self, File};
use std::hint::black_box;
use std::io::{BufRead, BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Command, ExitCode, Stdio};
use std::time::{Instant, SystemTime};

mod common;
use common::DISTURBED_OTHER_CPU_PER_WALL;

/// Default number of soundings in the generated file.
const DEFAULT_SOUNDINGS: u64 = 5_000_000;
/// Default number of runs of each side.
const DEFAULT_RUNS: usize = 3;
/// Default longest wait for an idle machine before each run, seconds.
const DEFAULT_WAIT_IDLE_S: u64 = 60;
/// Default number of times a disturbed run is discarded and run again.
const DEFAULT_RETRIES: u64 = 2;
/// Buffer size of the baseline's reader and writer, and of the line counter.
const IO_BUFFER_BYTES: usize = 256 * 1024;
/// Start of the generated soundings' times: 2026-06-14T07:00:00Z, seconds since 1970-01-01.
/// (20618 days from 1970-01-01 to 2026-06-14, times 86400, plus 7 h.)
const FIRST_TIME_S: u64 = 20_618 * 86_400 + 7 * 3_600;
/// Span of the generated soundings' times: 07:00Z to 17:00Z.
const TIME_SPAN_MS: u64 = 10 * 3_600 * 1_000;
/// Largest offset added to each coordinate of a generated position, metres.
const MAX_POSITION_OFFSET_M: f64 = 0.5;
/// Bump when the generated file's content changes, so that stale caches are not reused.
const GENERATOR_VERSION: u32 = 1;
/// Memory target for ebbwise, MiB (whatever the file size).
const EBBWISE_PEAK_RSS_TARGET_MIB: f64 = 50.0;

const USAGE: &str = "usage: cargo bench --bench reduce_throughput \
    [-- [--soundings N] [--runs K] [--wait-idle SECONDS] [--retries R] \
    [--demo-project FILE.toml] [--uncertainty] [--format csv|parquet] [--no-exports]]";

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    match args.first().map(String::as_str) {
        Some("--baseline-child") if args.len() == 3 => {
            return exit_on_error(baseline_child(Path::new(&args[1]), Path::new(&args[2])));
        }
        Some("--generate-child") if args.len() == 3 => {
            let n = match parse_count(&args[1]) {
                Some(n) => n,
                None => return exit_on_error(Err(format!("bad soundings count '{}'", args[1]))),
            };
            return exit_on_error(generate_child(n, Path::new(&args[2])));
        }
        _ => {}
    }
    let mut soundings = DEFAULT_SOUNDINGS;
    let mut runs = DEFAULT_RUNS;
    let mut wait_idle_s = DEFAULT_WAIT_IDLE_S;
    let mut retries = DEFAULT_RETRIES;
    let mut variant = Variant {
        demo_project: "project.toml".into(),
        uncertainty: false,
        format: "csv".into(),
        no_exports: false,
    };
    let mut it = args.iter();
    while let Some(a) = it.next() {
        match a.as_str() {
            // cargo bench passes --bench to harness = false targets.
            "--bench" => {}
            "--soundings" => match it.next().and_then(|v| parse_count(v)) {
                Some(n) if n > 0 => soundings = n,
                _ => return usage_error("--soundings needs a positive whole number"),
            },
            "--runs" => match it.next().and_then(|v| parse_count(v)) {
                Some(k) if k > 0 => runs = k as usize,
                _ => return usage_error("--runs needs a positive whole number"),
            },
            "--wait-idle" => match it.next().and_then(|v| parse_count(v)) {
                Some(w) => wait_idle_s = w,
                None => return usage_error("--wait-idle needs a whole number of seconds"),
            },
            "--retries" => match it.next().and_then(|v| parse_count(v)) {
                Some(r) => retries = r,
                None => return usage_error("--retries needs a whole number"),
            },
            "--demo-project" => match it.next() {
                Some(f) if !f.contains('/') && f.ends_with(".toml") => variant.demo_project = f.clone(),
                _ => return usage_error("--demo-project needs a project file name in zoning-demo/ (e.g. continuous.toml)"),
            },
            "--uncertainty" => variant.uncertainty = true,
            "--no-exports" => variant.no_exports = true,
            "--format" => match it.next().map(String::as_str) {
                Some(f @ ("csv" | "parquet")) => variant.format = f.to_string(),
                _ => return usage_error("--format needs csv or parquet"),
            },
            "-h" | "--help" => {
                println!("{USAGE}");
                return ExitCode::SUCCESS;
            }
            other => return usage_error(&format!("unknown argument '{other}'")),
        }
    }
    exit_on_error(bench(soundings, runs, wait_idle_s, retries, &variant))
}

/// Which demo project the benchmark's project is made from, and whether its `[uncertainty]`
/// table is kept.
struct Variant {
    /// A project file in `zoning-demo/`.
    demo_project: String,
    /// Keep `[uncertainty]` (the budget columns and the QA report).
    uncertainty: bool,
    /// ebbwise's output format: `csv` or `parquet` (`--format`).
    format: String,
    /// `[output] geojson_exports = false`.
    no_exports: bool,
}

impl Variant {
    /// Suffix of the project and results file names; empty for the default.
    fn suffix(&self) -> String {
        let mut s = String::new();
        if self.demo_project != "project.toml" {
            s.push('-');
            s.push_str(self.demo_project.trim_end_matches(".toml"));
        }
        if self.uncertainty {
            s.push_str("-u");
        }
        if self.no_exports {
            s.push_str("-noexp");
        }
        s
    }
}

fn usage_error(msg: &str) -> ExitCode {
    eprintln!("reduce_throughput: {msg}\n{USAGE}");
    ExitCode::from(2)
}

fn exit_on_error(r: Result<(), String>) -> ExitCode {
    match r {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("reduce_throughput: FAILED: {e}");
            ExitCode::FAILURE
        }
    }
}

/// Parses a count written with or without `_` separators (`5_000_000`).
fn parse_count(s: &str) -> Option<u64> {
    s.replace('_', "").parse().ok()
}

// ------------------------------------------------------------------------------------------------
// Locations

struct Paths {
    /// `<target>/release/ebbwise`.
    ebbwise: PathBuf,
    /// `<target>/bench-data`.
    data_root: PathBuf,
    /// The bundled demo folder.
    demo: PathBuf,
}

fn locate() -> Result<Paths, String> {
    Ok(Paths {
        ebbwise: common::ebbwise_binary()?,
        data_root: common::target_dir()?.join("bench-data"),
        demo: Path::new(env!("CARGO_MANIFEST_DIR")).join("zoning-demo"),
    })
}

// ------------------------------------------------------------------------------------------------
// Test data

/// Deterministic 64-bit mix of `x` (SplitMix64 finaliser).
fn mix64(mut x: u64) -> u64 {
    x = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    x = (x ^ (x >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    x = (x ^ (x >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    x ^ (x >> 31)
}

/// A deterministic offset in [−MAX_POSITION_OFFSET_M, +MAX_POSITION_OFFSET_M) metres.
fn offset_m(key: u64) -> f64 {
    let unit = (mix64(key) >> 11) as f64 / (1u64 << 53) as f64;
    (2.0 * unit - 1.0) * MAX_POSITION_OFFSET_M
}

/// One row of launch-a as the generator reuses it.
struct SourceRow {
    easting_m: f64,
    northing_m: f64,
    /// The depth field as written (kept verbatim).
    depth: String,
    line: String,
}

/// Reads launch-a: its header line and its rows.
fn read_launch_a(path: &Path) -> Result<(String, Vec<SourceRow>), String> {
    let f = File::open(path).map_err(|e| format!("{}: {e}", path.display()))?;
    let mut lines = BufReader::new(f).lines();
    let header = lines
        .next()
        .ok_or_else(|| format!("{}: empty", path.display()))?
        .map_err(|e| format!("{}: {e}", path.display()))?;
    let cols: Vec<&str> = header.split(',').collect();
    if cols != ["time", "easting", "northing", "depth_m", "line"] {
        return Err(format!(
            "{}: expected the header time,easting,northing,depth_m,line, found {header}",
            path.display()
        ));
    }
    let mut rows = Vec::new();
    for (i, l) in lines.enumerate() {
        let l = l.map_err(|e| format!("{}: {e}", path.display()))?;
        if l.trim().is_empty() {
            continue;
        }
        let f: Vec<&str> = l.split(',').collect();
        let bad = || format!("{}:{}: unexpected row '{l}'", path.display(), i + 2);
        if f.len() != 5 {
            return Err(bad());
        }
        rows.push(SourceRow {
            easting_m: f[1].parse().map_err(|_| bad())?,
            northing_m: f[2].parse().map_err(|_| bad())?,
            depth: f[3].to_string(),
            line: f[4].to_string(),
        });
    }
    if rows.is_empty() {
        return Err(format!("{}: no rows", path.display()));
    }
    Ok((header, rows))
}

fn push_2(out: &mut Vec<u8>, v: u64) {
    out.push(b'0' + (v / 10 % 10) as u8);
    out.push(b'0' + (v % 10) as u8);
}

/// Appends `2026-06-14THH:MM:SS.mmmZ` for `t_ms` milliseconds since 1970-01-01 (the date part
/// assumes 2026-06-14, which every generated time falls on).
fn push_time(out: &mut Vec<u8>, t_ms: u64) {
    let day_s = t_ms / 1000 % 86_400;
    out.extend_from_slice(b"2026-06-14T");
    push_2(out, day_s / 3600);
    out.push(b':');
    push_2(out, day_s / 60 % 60);
    out.push(b':');
    push_2(out, day_s % 60);
    out.push(b'.');
    let ms = t_ms % 1000;
    out.push(b'0' + (ms / 100) as u8);
    push_2(out, ms);
    out.push(b'Z');
}

/// Appends `v` rounded to centimetres with two decimals (`v` ≥ 0).
fn push_cm(out: &mut Vec<u8>, v: f64) {
    let cm = (v * 100.0).round() as u64;
    out.extend_from_slice((cm / 100).to_string().as_bytes());
    out.push(b'.');
    push_2(out, cm % 100);
}

/// Hidden mode: writes the N-row soundings file to `path` (through a temporary, renamed at the
/// end so that an interrupted generation never looks complete).
fn generate_child(n: u64, path: &Path) -> Result<(), String> {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("zoning-demo");
    let (header, rows) = read_launch_a(&demo.join("soundings/launch-a.csv"))?;
    let tmp = path.with_extension("csv.partial");
    let file = File::create(&tmp).map_err(|e| format!("{}: {e}", tmp.display()))?;
    let mut w = BufWriter::with_capacity(1 << 20, file);
    let mut line = Vec::with_capacity(128);
    let io = |e: std::io::Error| format!("{}: {e}", tmp.display());
    w.write_all(header.as_bytes()).map_err(io)?;
    w.write_all(b"\n").map_err(io)?;
    for i in 0..n {
        let src = &rows[(i % rows.len() as u64) as usize];
        line.clear();
        push_time(&mut line, FIRST_TIME_S * 1000 + i * TIME_SPAN_MS / n);
        line.push(b',');
        push_cm(&mut line, src.easting_m + offset_m(2 * i));
        line.push(b',');
        push_cm(&mut line, src.northing_m + offset_m(2 * i + 1));
        line.push(b',');
        line.extend_from_slice(src.depth.as_bytes());
        line.push(b',');
        line.extend_from_slice(src.line.as_bytes());
        line.push(b'\n');
        w.write_all(&line).map_err(io)?;
    }
    w.flush().map_err(io)?;
    drop(w);
    fs::rename(&tmp, path).map_err(|e| format!("{}: {e}", path.display()))
}

/// Writes the benchmark's project file: the demo project's zoning, gauge, virtual-gauge, QC,
/// interpolation, gap-filling and tide-field tables with absolute paths (and `[uncertainty]`
/// when the variant keeps it), and one soundings group (the launch-a group's layout keys)
/// naming `csv`. Other top-level keys of the demo project are not carried over; their names
/// are returned.
fn write_project(
    demo: &Path,
    variant: &Variant,
    csv: &Path,
    n: u64,
    out: &Path,
) -> Result<Vec<String>, String> {
    let demo_project = demo.join(&variant.demo_project);
    let text = fs::read_to_string(&demo_project)
        .map_err(|e| format!("{}: {e}", demo_project.display()))?;
    let demo_doc: toml::Table = text
        .parse()
        .map_err(|e| format!("{}: {e}", demo_project.display()))?;
    let abs = |rel: &toml::Value| -> Result<toml::Value, String> {
        let s = rel
            .as_str()
            .ok_or_else(|| format!("{}: expected a path string", demo_project.display()))?;
        let p = demo.join(s);
        let p = p
            .canonicalize()
            .map_err(|e| format!("{}: {e}", p.display()))?;
        Ok(toml::Value::String(p.to_string_lossy().into_owned()))
    };
    let mut doc = toml::Table::new();
    doc.insert(
        "name".into(),
        toml::Value::String(format!("ebbwise throughput benchmark, {n} soundings")),
    );
    let zoning = demo_doc
        .get("zoning")
        .ok_or("the demo project has no zoning")?;
    doc.insert("zoning".into(), abs(zoning)?);
    let mut gauges = demo_doc
        .get("gauge")
        .and_then(toml::Value::as_array)
        .cloned()
        .ok_or("the demo project has no [[gauge]]")?;
    for g in gauges.iter_mut() {
        let g = g.as_table_mut().ok_or("a [[gauge]] is not a table")?;
        for k in ["record", "constants", "datums"] {
            if let Some(v) = g.get(k) {
                let v = abs(v)?;
                g.insert(k.into(), v);
            }
        }
    }
    doc.insert("gauge".into(), toml::Value::Array(gauges));
    if let Some(vs) = demo_doc
        .get("virtual_gauge")
        .and_then(toml::Value::as_array)
    {
        let mut vs = vs.clone();
        for v in vs.iter_mut() {
            let v = v
                .as_table_mut()
                .ok_or("a [[virtual_gauge]] is not a table")?;
            let c = abs(v
                .get("constants")
                .ok_or("a [[virtual_gauge]] has no constants")?)?;
            v.insert("constants".into(), c);
        }
        doc.insert("virtual_gauge".into(), toml::Value::Array(vs));
    }
    for k in [
        "qc",
        "interpolation",
        "gap_fill",
        "tide_field",
        "naive_time_utc_offset",
    ] {
        if let Some(v) = demo_doc.get(k) {
            doc.insert(k.into(), v.clone());
        }
    }
    if variant.uncertainty {
        if let Some(v) = demo_doc.get("uncertainty") {
            doc.insert("uncertainty".into(), v.clone());
        }
    }
    let launch_a = demo_doc
        .get("soundings")
        .and_then(toml::Value::as_array)
        .and_then(|groups| {
            groups.iter().find(|g| {
                g.get("files")
                    .and_then(toml::Value::as_array)
                    .is_some_and(|f| {
                        f.iter()
                            .any(|v| v.as_str() == Some("soundings/launch-a.csv"))
                    })
            })
        })
        .cloned()
        .ok_or("the demo project has no [[soundings]] group for soundings/launch-a.csv")?;
    let mut group = launch_a
        .as_table()
        .cloned()
        .ok_or("the launch-a [[soundings]] group is not a table")?;
    group.insert(
        "files".into(),
        toml::Value::Array(vec![toml::Value::String(
            csv.to_string_lossy().into_owned(),
        )]),
    );
    doc.insert(
        "soundings".into(),
        toml::Value::Array(vec![toml::Value::Table(group)]),
    );
    let mut output = toml::Table::new();
    output.insert("dir".into(), toml::Value::String("out".into()));
    if variant.no_exports {
        output.insert("geojson_exports".into(), toml::Value::Boolean(false));
    }
    doc.insert("output".into(), toml::Value::Table(output));
    let body = toml::to_string(&doc).map_err(|e| format!("cannot write the project: {e}"))?;
    let text = format!(
        "# Written by benches/reduce_throughput.rs from\n# {}:\n\
         # the demo's gauges and zoning, and one soundings group with the launch-a layout naming\n\
         # the generated {n}-row file.\n\n{body}",
        demo_project.display()
    );
    if fs::read_to_string(out).ok().as_deref() != Some(text.as_str()) {
        fs::write(out, text).map_err(|e| format!("{}: {e}", out.display()))?;
    }
    Ok(demo_doc
        .keys()
        .filter(|k| !doc.contains_key(k.as_str()) && k.as_str() != "soundings")
        .cloned()
        .collect())
}

// ------------------------------------------------------------------------------------------------
// Baseline

fn parse_f64(field: &[u8]) -> f64 {
    std::str::from_utf8(field)
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(f64::NAN)
}

/// Hidden mode: the baseline. Reads `input` with the csv crate, parses depth, easting and
/// northing, and writes every record with three float columns appended to `output`.
fn baseline_child(input: &Path, output: &Path) -> Result<(), String> {
    let err = |e: csv::Error| e.to_string();
    let mut rdr = csv::ReaderBuilder::new()
        .buffer_capacity(IO_BUFFER_BYTES)
        .from_path(input)
        .map_err(err)?;
    let header = rdr.byte_headers().map_err(err)?.clone();
    let col = |name: &str| -> Result<usize, String> {
        header
            .iter()
            .position(|h| h == name.as_bytes())
            .ok_or_else(|| format!("{}: no column '{name}'", input.display()))
    };
    let (depth_col, easting_col, northing_col) =
        (col("depth_m")?, col("easting")?, col("northing")?);
    let file = File::create(output).map_err(|e| format!("{}: {e}", output.display()))?;
    let mut wtr = csv::Writer::from_writer(BufWriter::with_capacity(IO_BUFFER_BYTES, file));
    let mut out_header = header.clone();
    for name in ["depth_m_copy", "depth_plus_1_m", "depth_minus_1_m"] {
        out_header.push_field(name.as_bytes());
    }
    wtr.write_byte_record(&out_header).map_err(err)?;
    let mut rec = csv::ByteRecord::new();
    let mut fmt = ryu::Buffer::new();
    while rdr.read_byte_record(&mut rec).map_err(err)? {
        let depth_m = parse_f64(&rec[depth_col]);
        let easting_m = parse_f64(&rec[easting_col]);
        let northing_m = parse_f64(&rec[northing_col]);
        black_box((easting_m, northing_m));
        for field in rec.iter() {
            wtr.write_field(field).map_err(err)?;
        }
        wtr.write_field(fmt.format(depth_m)).map_err(err)?;
        wtr.write_field(fmt.format(depth_m + 1.0)).map_err(err)?;
        wtr.write_field(fmt.format(depth_m - 1.0)).map_err(err)?;
        wtr.write_record(None::<&[u8]>).map_err(err)?;
    }
    wtr.flush()
        .map_err(|e| format!("{}: {e}", output.display()))
}

// ------------------------------------------------------------------------------------------------
// Measuring a child

/// What one child process took.
#[derive(Debug, Clone, Copy)]
struct Measured {
    wall_s: f64,
    /// User + system CPU time of the child, seconds.
    cpu_s: f64,
    /// The child's own peak resident set, KiB (`ru_maxrss` from `wait4`).
    peak_rss_kib: i64,
    /// Exit status, or `None` when killed by a signal.
    exit_code: Option<i32>,
    /// CPU time used on the whole machine during the run by everything but the child, seconds
    /// (from /proc/stat; a disturbance indicator).
    other_cpu_s: f64,
}

impl Measured {
    /// Whether other processes used a noticeable share of the machine during the run.
    fn disturbed(&self) -> bool {
        common::disturbed(self.other_cpu_s, self.wall_s, 0.0)
    }
}

/// Waits until the machine has been idle, at most `max_s` seconds (0: not at all).
fn wait_for_idle(max_s: u64) {
    if !common::wait_for_idle(max_s, "waiting for other processes to go idle…") {
        eprintln!("reduce_throughput: the machine is still busy after {max_s} s; running anyway");
    }
}

/// Runs `cmd` with stdout and stderr to `log`, waits for it with `wait4` on its pid, and returns
/// its wall time, CPU time and peak resident set.
fn run_measured(cmd: &mut Command, log: &Path) -> Result<Measured, String> {
    let log_file = File::create(log).map_err(|e| format!("{}: {e}", log.display()))?;
    let log_err = log_file
        .try_clone()
        .map_err(|e| format!("{}: {e}", log.display()))?;
    cmd.stdin(Stdio::null())
        .stdout(Stdio::from(log_file))
        .stderr(Stdio::from(log_err));
    let busy_before_s = common::machine_busy_s();
    let r = common::run_child(cmd)?;
    let busy_after_s = common::machine_busy_s();
    if let (None, Some(signal)) = (r.exit_code, r.signal) {
        eprintln!(
            "reduce_throughput: {:?} was killed by signal {signal}",
            cmd.get_program(),
        );
    }
    Ok(Measured {
        wall_s: r.wall_s,
        cpu_s: r.cpu_s,
        peak_rss_kib: r.peak_rss_kib,
        exit_code: r.exit_code,
        other_cpu_s: (busy_after_s - busy_before_s - r.cpu_s).max(0.0),
    })
}

/// Lines in a file: line ends, plus one for a last line without an end.
/// Rows of a Parquet file, from its footer.
fn parquet_rows(path: &Path) -> Result<u64, String> {
    use parquet::file::reader::FileReader;
    let f = fs::File::open(path).map_err(|e| format!("{}: {e}", path.display()))?;
    let r = parquet::file::reader::SerializedFileReader::new(f)
        .map_err(|e| format!("{}: {e}", path.display()))?;
    Ok(r.metadata().file_metadata().num_rows().max(0) as u64)
}

fn count_lines(path: &Path) -> Result<u64, String> {
    let mut f = File::open(path).map_err(|e| format!("{}: {e}", path.display()))?;
    let mut buf = vec![0u8; IO_BUFFER_BYTES];
    let mut n = 0u64;
    let mut last = b'\n';
    loop {
        let k = match f.read(&mut buf) {
            Ok(0) => break,
            Ok(k) => k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(format!("{}: {e}", path.display())),
        };
        n += buf[..k].iter().filter(|&&c| c == b'\n').count() as u64;
        last = buf[k - 1];
    }
    Ok(if last == b'\n' { n } else { n + 1 })
}

fn tail(path: &Path, max_lines: usize) -> String {
    let text = fs::read_to_string(path).unwrap_or_default();
    let lines: Vec<&str> = text.lines().collect();
    lines[lines.len().saturating_sub(max_lines)..].join("\n")
}

fn file_mib(path: &Path) -> f64 {
    fs::metadata(path)
        .map(|m| m.len() as f64)
        .unwrap_or(f64::NAN)
        / (1024.0 * 1024.0)
}

fn remove_if_present(p: &Path) -> Result<(), String> {
    let r = if p.is_dir() {
        fs::remove_dir_all(p)
    } else {
        fs::remove_file(p)
    };
    match r {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(()),
        Err(e) => Err(format!("cannot delete {}: {e}", p.display())),
    }
}

/// `ebbwise --version` and when the binary was built (its modification time).
fn ebbwise_build(ebbwise: &Path, built_at: Option<SystemTime>) -> String {
    let version = Command::new(ebbwise)
        .arg("--version")
        .output()
        .ok()
        .map(|o| String::from_utf8_lossy(&o.stdout).trim().to_string())
        .unwrap_or_default();
    let built = built_at.map(utc_label).unwrap_or_default();
    format!("{version}, built {built}")
}

/// `YYYY-MM-DD HH:MM UTC` for a time.
fn utc_label(t: SystemTime) -> String {
    let s = t
        .duration_since(SystemTime::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0);
    let (days, rem) = (s / 86_400, s % 86_400);
    // Civil date from days since 1970-01-01 (proleptic Gregorian calendar).
    let z = days as i64 + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!(
        "{y:04}-{m:02}-{d:02} {:02}:{:02} UTC",
        rem / 3600,
        rem / 60 % 60
    )
}

// ------------------------------------------------------------------------------------------------
// The benchmark

fn mib(kib: i64) -> f64 {
    kib as f64 / 1024.0
}

/// Reads ebbwise's run summary: rows per status (an object `{status: n}` or pairs `[status, n]`).
fn ebbwise_status_counts(summary: &Path) -> String {
    let Ok(text) = fs::read_to_string(summary) else {
        return "(no reduce-summary.json)".into();
    };
    let Ok(v) = serde_json::from_str::<serde_json::Value>(&text) else {
        return "(unreadable reduce-summary.json)".into();
    };
    let pairs: Vec<(String, u64)> = match v.get("rows_by_status") {
        Some(serde_json::Value::Object(m)) => m
            .iter()
            .filter_map(|(k, n)| Some((k.clone(), n.as_u64()?)))
            .collect(),
        Some(serde_json::Value::Array(a)) => a
            .iter()
            .filter_map(|p| Some((p.get(0)?.as_str()?.to_string(), p.get(1)?.as_u64()?)))
            .collect(),
        _ => Vec::new(),
    };
    if pairs.is_empty() {
        return "(no rows_by_status in reduce-summary.json)".into();
    }
    pairs
        .iter()
        .map(|(k, n)| format!("{k} {n}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Takes an exclusive lock on `dir` (released when the returned file is dropped or the process
/// ends), so that two benchmarks of the same size never share the data and output folder.
fn lock_dir(dir: &Path) -> Result<File, String> {
    use std::os::fd::AsRawFd;
    let path = dir.join(".lock");
    let f = File::create(&path).map_err(|e| format!("{}: {e}", path.display()))?;
    // SAFETY: flock on a file descriptor we own; no memory is passed.
    if unsafe { libc::flock(f.as_raw_fd(), libc::LOCK_EX | libc::LOCK_NB) } != 0 {
        return Err(format!(
            "another reduce_throughput run is using {}: wait for it to finish",
            dir.display()
        ));
    }
    Ok(f)
}

/// One baseline run: the measurement, the time to fsync its output afterwards (not part of the
/// measurement), and the output's size in MiB. The output is checked, then deleted.
fn run_baseline_once(
    this_exe: &Path,
    csv: &Path,
    base_out: &Path,
    base_log: &Path,
    n: u64,
) -> Result<(Measured, f64, f64), String> {
    let mut cmd = Command::new(this_exe);
    cmd.arg("--baseline-child").arg(csv).arg(base_out);
    let b = run_measured(&mut cmd, base_log)?;
    if b.exit_code != Some(0) {
        return Err(format!(
            "the baseline failed (exit {:?}); its log {}:\n{}",
            b.exit_code,
            base_log.display(),
            tail(base_log, 20)
        ));
    }
    // Time to make the baseline's output durable (ebbwise syncs its output before renaming it,
    // inside its measured time; the baseline does not). Informational only.
    let t = Instant::now();
    File::open(base_out)
        .and_then(|f| f.sync_all())
        .map_err(|e| format!("{}: {e}", base_out.display()))?;
    let fsync_s = t.elapsed().as_secs_f64();
    let lines = count_lines(base_out)?;
    if lines != n + 1 {
        return Err(format!(
            "the baseline wrote {lines} lines to {}, expected {}",
            base_out.display(),
            n + 1
        ));
    }
    let size_mib = file_mib(base_out);
    remove_if_present(base_out)?;
    Ok((b, fsync_s, size_mib))
}

/// One ebbwise run: the measurement, the output's size in MiB and ebbwise's status counts. The output
/// is checked (header + one line per sounding), then deleted.
fn run_ebbwise_once(
    ebbwise: &Path,
    project: &Path,
    ebbwise_out: &Path,
    ebbwise_csv: &Path,
    ebbwise_log: &Path,
    n: u64,
    format: &str,
) -> Result<(Measured, f64, String), String> {
    let mut cmd = Command::new(ebbwise);
    cmd.arg("reduce")
        .arg(project)
        .arg("--out")
        .arg(ebbwise_out)
        .arg("--no-progress")
        .arg("--format")
        .arg(format);
    let r = run_measured(&mut cmd, ebbwise_log)?;
    // 0: all reduced; 1: some rows not reduced (expected: the demo's gauge gap and the
    // overshooting line); anything else means ebbwise could not run.
    if !matches!(r.exit_code, Some(0) | Some(1)) {
        return Err(format!(
            "ebbwise failed (exit {:?}); its log {}:\n{}",
            r.exit_code,
            ebbwise_log.display(),
            tail(ebbwise_log, 30)
        ));
    }
    // A Parquet output has no header line: its footer's row count, plus one, stands for it.
    let lines = if format == "parquet" {
        parquet_rows(ebbwise_csv)? + 1
    } else {
        count_lines(ebbwise_csv)
            .map_err(|e| format!("ebbwise's output is missing or unreadable: {e}"))?
    };
    if lines != n + 1 {
        return Err(format!(
            "ebbwise wrote {lines} lines to {}, expected {} (header + one per sounding)",
            ebbwise_csv.display(),
            n + 1
        ));
    }
    let size_mib = file_mib(ebbwise_csv);
    let statuses = ebbwise_status_counts(&ebbwise_out.join("reduce-summary.json"));
    remove_if_present(ebbwise_out)?;
    Ok((r, size_mib, statuses))
}

fn bench(
    n: u64,
    runs: usize,
    wait_idle_s: u64,
    retries: u64,
    variant: &Variant,
) -> Result<(), String> {
    let paths = locate()?;
    common::warn_if_stale(&paths.ebbwise);
    // The children are this executable again.
    let this_exe = common::this_exe()?;
    let dir = paths.data_root.join(format!("n{n}"));
    fs::create_dir_all(&dir).map_err(|e| format!("{}: {e}", dir.display()))?;
    let dir = dir
        .canonicalize()
        .map_err(|e| format!("{}: {e}", dir.display()))?;
    let _lock = lock_dir(&dir)?;
    let csv = dir.join(format!("soundings-v{GENERATOR_VERSION}.csv"));
    let project = dir.join(format!("project{}.toml", variant.suffix()));

    if !csv.is_file() {
        eprintln!(
            "reduce_throughput: generating {} ({n} soundings)…",
            csv.display()
        );
        let t = Instant::now();
        let status = Command::new(&this_exe)
            .arg("--generate-child")
            .arg(n.to_string())
            .arg(&csv)
            .status()
            .map_err(|e| format!("cannot start the generator: {e}"))?;
        if !status.success() {
            return Err(format!("generating {} failed ({status})", csv.display()));
        }
        eprintln!(
            "reduce_throughput: generated in {:.1} s",
            t.elapsed().as_secs_f64()
        );
    }
    let not_carried = write_project(&paths.demo, variant, &csv, n, &project)?;
    let input_lines = count_lines(&csv)?;
    if input_lines != n + 1 {
        return Err(format!(
            "{} has {input_lines} lines, expected {} (header + {n}): delete it to regenerate",
            csv.display(),
            n + 1
        ));
    }
    let input_mib = file_mib(&csv);

    let ebbwise_out = dir.join("out-ebbwise");
    let ebbwise_csv = ebbwise_out.join(
        csv.file_stem()
            .map(|s| format!("{}.reduced.{}", s.to_string_lossy(), variant.format))
            .unwrap_or_default(),
    );
    let base_out = dir.join("out-baseline.csv");
    let ebbwise_log = dir.join("ebbwise.log");
    let base_log = dir.join("baseline.log");
    remove_if_present(&ebbwise_out)?;
    remove_if_present(&base_out)?;

    // Run a copy, so that a rebuild of target/release/ebbwise during the benchmark (cargo by
    // another user of the target folder) cannot mix two builds in one result.
    let ebbwise_copy = dir.join("ebbwise-under-test");
    let modified = |p: &Path| fs::metadata(p).and_then(|m| m.modified()).ok();
    let built_at = modified(&paths.ebbwise);
    fs::copy(&paths.ebbwise, &ebbwise_copy).map_err(|e| {
        format!(
            "cannot copy {} to {}: {e}",
            paths.ebbwise.display(),
            ebbwise_copy.display()
        )
    })?;
    if modified(&paths.ebbwise) != built_at {
        return Err(format!(
            "{} changed while it was being copied (a build is running?): run again",
            paths.ebbwise.display()
        ));
    }
    let built = ebbwise_build(&ebbwise_copy, built_at);
    let m = common::machine();
    let load_before = common::load_average();
    // Peak RSS that a trivial child reports when started from this process: the floor that any
    // child's ru_maxrss includes.
    let floor = run_measured(&mut Command::new("true"), &dir.join("true.log"))?;

    println!("ebbwise reduce throughput: {n} soundings, {runs} run(s) of each side");
    println!("  input     {} ({input_mib:.0} MiB)", csv.display());
    println!("  project   {}", project.display());
    if !not_carried.is_empty() {
        println!(
            "            (demo project keys not carried over: {})",
            not_carried.join(", ")
        );
    }
    println!("  ebbwise      {} ({})", paths.ebbwise.display(), built);
    println!("            run from a copy: {}", ebbwise_copy.display());
    println!(
        "  machine   {} | {} logical CPUs | {:.1} GiB RAM | Linux {}",
        m.cpu_model, m.logical_cpus, m.memory_gib, m.kernel
    );
    println!("  load avg  {load_before} (before)");
    println!(
        "  spawn floor: `true` started the same way reports {:.1} MiB peak RSS",
        mib(floor.peak_rss_kib)
    );
    println!();
    println!(
        "  {:<9} {:>3} {:>9} {:>9} {:>10} {:>10} {:>11} {:>5}",
        "side", "run", "wall s", "CPU s", "peak MiB", "out MiB", "other CPU s", "exit"
    );

    let mut base_runs: Vec<Measured> = Vec::new();
    let mut ebbwise_runs: Vec<Measured> = Vec::new();
    let mut base_fsync_s: Vec<f64> = Vec::new();
    let mut out_mib = (f64::NAN, f64::NAN);
    let mut statuses = String::new();
    let mut discarded = 0usize;
    for run in 1..=runs {
        for side in ["baseline", "ebbwise"] {
            let mut attempt = 0;
            loop {
                attempt += 1;
                wait_for_idle(wait_idle_s);
                let m = if side == "baseline" {
                    let (m, fsync_s, size_mib) =
                        run_baseline_once(&this_exe, &csv, &base_out, &base_log, n)?;
                    base_fsync_s.push(fsync_s);
                    out_mib.0 = size_mib;
                    m
                } else {
                    let (m, size_mib, st) = run_ebbwise_once(
                        &ebbwise_copy,
                        &project,
                        &ebbwise_out,
                        &ebbwise_csv,
                        &ebbwise_log,
                        n,
                        &variant.format,
                    )?;
                    out_mib.1 = size_mib;
                    statuses = st;
                    m
                };
                let again = m.disturbed() && attempt <= retries;
                println!(
                    "  {:<9} {:>3} {:>9.2} {:>9.2} {:>10.1} {:>10.0} {:>11.2} {:>5}{}",
                    side,
                    run,
                    m.wall_s,
                    m.cpu_s,
                    mib(m.peak_rss_kib),
                    if side == "baseline" {
                        out_mib.0
                    } else {
                        out_mib.1
                    },
                    m.other_cpu_s,
                    m.exit_code.unwrap_or(-1),
                    match (m.disturbed(), again) {
                        (false, _) => "",
                        (true, true) => "  DISTURBED: discarded, again",
                        (true, false) => "  DISTURBED",
                    }
                );
                if again {
                    discarded += 1;
                    continue;
                }
                if side == "baseline" {
                    base_runs.push(m);
                } else {
                    ebbwise_runs.push(m);
                }
                break;
            }
        }
    }
    let load_after = common::load_average();

    let summary = |v: &[Measured]| {
        (
            common::median(v.iter().map(|m| m.wall_s).collect()),
            common::median(v.iter().map(|m| m.cpu_s).collect()),
            v.iter().map(|m| m.peak_rss_kib).max().unwrap_or(0),
        )
    };
    let (b_wall_s, b_cpu_s, b_rss_kib) = summary(&base_runs);
    let (n_wall_s, n_cpu_s, n_rss_kib) = summary(&ebbwise_runs);
    let fsync_s = common::median(base_fsync_s);
    let ratio = b_wall_s / n_wall_s;
    let rate = |wall_s: f64| n as f64 / wall_s;

    let mut md = String::new();
    md.push_str(&format!(
        "{n} soundings ({input_mib:.0} MiB of CSV), {runs} run(s) of each side, {}.\n\
         ebbwise: {}.\n\
         Machine: {}, {} logical CPUs, {:.1} GiB RAM, Linux {}. Load average before/after: \
         {load_before} / {load_after}.\n\n",
        utc_label(SystemTime::now()),
        built,
        m.cpu_model,
        m.logical_cpus,
        m.memory_gib,
        m.kernel
    ));
    md.push_str(
        "| side | median wall time (s) | soundings per second | median CPU time (s) \
         | peak RSS (MiB, max of runs) | output (MiB) |\n|---|---:|---:|---:|---:|---:|\n",
    );
    md.push_str(&format!(
        "| baseline (csv crate, 1 thread) | {b_wall_s:.2} | {:.0} | {b_cpu_s:.2} | {:.1} | {:.0} |\n",
        rate(b_wall_s),
        mib(b_rss_kib),
        out_mib.0
    ));
    md.push_str(&format!(
        "| ebbwise reduce | {n_wall_s:.2} | {:.0} | {n_cpu_s:.2} | {:.1} | {:.0} |\n\n",
        rate(n_wall_s),
        mib(n_rss_kib),
        out_mib.1
    ));
    md.push_str(&format!(
        "ebbwise / baseline throughput: **{ratio:.2}×** (target ≥ 1: {}). ebbwise peak RSS \
         {:.1} MiB (target < {EBBWISE_PEAK_RSS_TARGET_MIB:.0} MiB: {}).\n\
         Baseline output fsync, not in the baseline's time: median {fsync_s:.2} s (ebbwise's time \
         includes syncing its own output). A trivial child started the same way reports \
         {:.1} MiB peak RSS.\nebbwise statuses: {statuses}.\n",
        if ratio >= 1.0 { "met" } else { "NOT met" },
        mib(n_rss_kib),
        if mib(n_rss_kib) < EBBWISE_PEAK_RSS_TARGET_MIB {
            "met"
        } else {
            "NOT met"
        },
        mib(floor.peak_rss_kib)
    ));
    let disturbed = base_runs
        .iter()
        .chain(&ebbwise_runs)
        .filter(|r| r.disturbed())
        .count();
    md.push_str(&format!(
        "Runs disturbed by other processes (they used more than {DISTURBED_OTHER_CPU_PER_WALL} \
         CPU-s per wall-s): {disturbed} of the {} kept; {discarded} disturbed run(s) discarded \
         and run again.\n",
        2 * runs
    ));
    md.push_str("\nPer run (wall s / CPU s / peak RSS MiB / other processes' CPU s):\n\n");
    for (i, (b, r)) in base_runs.iter().zip(&ebbwise_runs).enumerate() {
        md.push_str(&format!(
            "- run {}: baseline {:.2} / {:.2} / {:.1} / {:.2}{}; ebbwise {:.2} / {:.2} / {:.1} / {:.2}{}\n",
            i + 1,
            b.wall_s,
            b.cpu_s,
            mib(b.peak_rss_kib),
            b.other_cpu_s,
            if b.disturbed() { " (disturbed)" } else { "" },
            r.wall_s,
            r.cpu_s,
            mib(r.peak_rss_kib),
            r.other_cpu_s,
            if r.disturbed() { " (disturbed)" } else { "" },
        ));
    }
    let md_path = paths.data_root.join(format!(
        "results-n{n}{}{}.md",
        variant.suffix(),
        if variant.format == "parquet" {
            "-parquet"
        } else {
            ""
        }
    ));
    fs::write(&md_path, &md).map_err(|e| format!("{}: {e}", md_path.display()))?;
    println!();
    println!("{md}");
    println!("(also written to {})", md_path.display());
    Ok(())
}
