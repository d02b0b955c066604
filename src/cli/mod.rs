//! Command-line interface: clap structs hold only what the user typed; each command builds its
//! run configuration, calls the library and maps the outcome to an exit status
//! (0 ok, 1 some soundings not reduced or checks failed, 2 could not run).

use std::io::Write;
use std::path::{Path, PathBuf};

use clap::{Parser, Subcommand};

use ebbwise::compute::reduce::SoundingStatus;
use ebbwise::io::error::Finding;
use ebbwise::io::project::Project;
use ebbwise::io::report_html::render_html;
use ebbwise::run::check::check_project;
use ebbwise::run::load::load;
use ebbwise::run::qa_report::build_qa_report;
use ebbwise::run::reduce::{reduce_project, ReduceOptions, RunSummary};
use ebbwise::{CAUTION, EXIT_CANNOT_RUN, EXIT_INCOMPLETE, EXIT_OK};

/// Reduce hydrographic soundings to chart datum with tidal zoning.
#[derive(Debug, Parser)]
#[command(name = "ebbwise", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Reduce every sounding of a project to chart datum.
    Reduce {
        /// The project file (TOML).
        project: PathBuf,
        /// Output folder (default: the project's `[output] dir`).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Worker threads (default: all cores).
        #[arg(long)]
        threads: Option<usize>,
        /// Never show a progress bar.
        #[arg(long)]
        no_progress: bool,
        /// Survey order to judge against (overrides the project's `[uncertainty] order`):
        /// exclusive, special, 1a, 1b, 2 or a custom order's name.
        #[arg(long)]
        order: Option<String>,
        /// Do not compute uncertainty (no uncertainty columns, no QA report) even when the
        /// project has an `[uncertainty]` section.
        #[arg(long)]
        no_uncertainty: bool,
    },
    /// Read everything a reduction would and report problems, without reducing.
    Check {
        /// The project file (TOML).
        project: PathBuf,
        /// Print the findings as JSON on stdout.
        #[arg(long)]
        json: bool,
    },
    /// Write tide-correction files (per zone on a regular step; per survey line with
    /// --per-line; per sounding with --per-sounding), each with a JSON provenance sidecar.
    Correctors {
        /// The project file (TOML).
        project: PathBuf,
        /// Output folder (default: the project's `[output] dir`).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Time step of the per-zone file, minutes.
        #[arg(long, default_value_t = 1.0)]
        step_min: f64,
        /// Start of the span, ISO 8601 with offset (default: first sounding, floored to the step).
        #[arg(long)]
        from: Option<String>,
        /// End of the span, ISO 8601 with offset (default: last sounding, ceiled to the step).
        #[arg(long)]
        to: Option<String>,
        /// Also write one corrector row per sounding (`<stem>.correctors.csv`).
        #[arg(long)]
        per_sounding: bool,
        /// Also write a regular-step series per survey line (`correctors-lines.csv`): the tide
        /// in the zone where the launch was at each time.
        #[arg(long)]
        per_line: bool,
    },
    /// Reduce soundings with tide from a correction file written by `ebbwise correctors`.
    Apply {
        /// The correction file (per zone or per sounding).
        corrections: PathBuf,
        /// Soundings files to reduce (default: all of the project's); each must belong to a
        /// `[[soundings]]` group of the project, which gives its layout.
        soundings: Vec<PathBuf>,
        /// The project file: soundings layouts and zoning.
        #[arg(long)]
        project: PathBuf,
        /// Output folder (default: the project's `[output] dir`).
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Quality control of gauge records: flags per sample with reasons, a plot per gauge, and
    /// gauge-to-gauge comparison through the zoning's correctors.
    Qc {
        /// The project file (TOML): every gauge, and the comparisons its zoning allows.
        #[arg(required_unless_present = "record", conflicts_with = "record")]
        project: Option<PathBuf>,
        /// Only this gauge (and the comparisons it takes part in).
        #[arg(long)]
        gauge: Option<String>,
        /// One record file instead of a project (CSV with a header).
        #[arg(long)]
        record: Option<PathBuf>,
        /// With --record: the time column (ISO 8601 with offset).
        #[arg(long, default_value = "time", requires = "record")]
        time_column: String,
        /// With --record: the height column.
        #[arg(long, default_value = "height", requires = "record")]
        height_column: String,
        /// With --record: units of the heights: m, ft or us_ft.
        #[arg(long, default_value = "m", requires = "record")]
        units: String,
        /// With --record: height of the gauge zero above chart datum, metres (levels are then
        /// above chart datum; without it, above the record's zero).
        #[arg(long, requires = "record", allow_hyphen_values = true)]
        zero_above_datum_m: Option<f64>,
        /// Output folder (default: `<project output dir>/qc`, or `./qc` with --record).
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Harmonic analysis of a gauge record: Z0, amplitude and Greenwich phase lag of each
    /// constituent, written to a constants file (TOML).
    #[command(visible_alias = "analyze")]
    Analyse {
        /// The record (CSV with a header); or give --project and --gauge.
        #[arg(required_unless_present = "project", conflicts_with = "project")]
        record: Option<PathBuf>,
        /// A project file: analyse one of its gauges (levels above chart datum).
        #[arg(long, requires = "gauge")]
        project: Option<PathBuf>,
        /// With --project: the gauge id.
        #[arg(long)]
        gauge: Option<String>,
        /// With a record: the time column (ISO 8601 with offset).
        #[arg(long, default_value = "time")]
        time_column: String,
        /// With a record: the height column.
        #[arg(long, default_value = "height")]
        height_column: String,
        /// With a record: units of the heights: m, ft or us_ft.
        #[arg(long, default_value = "m")]
        units: String,
        /// With a record: height of the gauge zero above chart datum, metres (levels are then
        /// above chart datum; without it, above the record's zero).
        #[arg(long, allow_hyphen_values = true)]
        zero_above_datum_m: Option<f64>,
        /// Constituents to fit, comma-separated (default: chosen by the Rayleigh criterion).
        #[arg(long, value_delimiter = ',')]
        constituents: Option<Vec<String>>,
        /// Rayleigh factor for the automatic choice.
        #[arg(long, default_value_t = 1.0)]
        rayleigh: f64,
        /// Do not infer unresolved K2, P1, N2, Q1 from S2, K1, M2, O1.
        #[arg(long)]
        no_inference: bool,
        /// Nodal corrections at every sample (per-sample, default) or at the record's centre.
        #[arg(long, default_value = "per-sample", value_parser = ["per-sample", "centre"])]
        nodal: String,
        /// Analyse every sample, without quality control.
        #[arg(long)]
        no_qc: bool,
        /// The constants file to write (default: `<gauge or record name>.constants.toml` in the
        /// current folder, or in the project's output folder).
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Predict the tide from a constants file on a regular grid, with high and low waters.
    Predict {
        /// The constants file (written by `ebbwise analyse`); or give --project and --gauge.
        #[arg(required_unless_present = "project", conflicts_with = "project")]
        constants: Option<PathBuf>,
        /// A project file whose gauge names its constants (`[[gauge]] constants`).
        #[arg(long, requires = "gauge")]
        project: Option<PathBuf>,
        /// With --project: the gauge id.
        #[arg(long)]
        gauge: Option<String>,
        /// Start, ISO 8601 with offset.
        #[arg(long)]
        from: String,
        /// End, ISO 8601 with offset (included when on the grid).
        #[arg(long)]
        to: String,
        /// Step, minutes.
        #[arg(long, default_value_t = 6.0)]
        step_min: f64,
        /// The series file (default `<constants name>.prediction.csv` in the current folder).
        #[arg(long)]
        out: Option<PathBuf>,
        /// The high/low water file (default `<constants name>.high-low-waters.csv`).
        #[arg(long)]
        high_low_waters: Option<PathBuf>,
    },
    /// Reduce the bundled demo survey and say where the results are.
    Demo {
        /// The demo folder (default: ./zoning-demo, else the one in the source tree).
        #[arg(long)]
        dir: Option<PathBuf>,
    },
}

/// Runs the command line; returns the exit status.
pub fn main() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() {
                EXIT_CANNOT_RUN
            } else {
                EXIT_OK
            };
            let _ = e.print();
            return code;
        }
    };
    match cli.command {
        Command::Reduce {
            project,
            out,
            threads,
            no_progress,
            order,
            no_uncertainty,
        } => {
            if let Some(n) = threads {
                if n == 0 {
                    eprintln!("ebbwise: --threads must be at least 1");
                    return EXIT_CANNOT_RUN;
                }
                let _ = rayon::ThreadPoolBuilder::new()
                    .num_threads(n)
                    .build_global();
            }
            cmd_reduce(
                &project,
                out,
                !no_progress,
                order.as_deref(),
                no_uncertainty,
            )
            .unwrap_or_else(report_failure)
        }
        Command::Check { project, json } => cmd_check(&project, json),
        Command::Correctors {
            project,
            out,
            step_min,
            from,
            to,
            per_sounding,
            per_line,
        } => cmd_correctors(&project, out, step_min, from, to, per_sounding, per_line)
            .unwrap_or_else(report_failure),
        Command::Apply {
            corrections,
            soundings,
            project,
            out,
        } => cmd_apply(&corrections, soundings, &project, out).unwrap_or_else(report_failure),
        Command::Qc {
            project,
            gauge,
            record,
            time_column,
            height_column,
            units,
            zero_above_datum_m,
            out,
        } => match (project, record) {
            (Some(p), _) => cmd_qc_project(&p, gauge.as_deref(), out),
            (None, Some(r)) => cmd_qc_record(
                &r,
                &time_column,
                &height_column,
                &units,
                zero_above_datum_m,
                out,
            ),
            (None, None) => EXIT_CANNOT_RUN,
        },
        Command::Analyse {
            record,
            project,
            gauge,
            time_column,
            height_column,
            units,
            zero_above_datum_m,
            constituents,
            rayleigh,
            no_inference,
            nodal,
            no_qc,
            out,
        } => cmd_analyse(AnalyseArgs {
            record,
            project,
            gauge,
            time_column,
            height_column,
            units,
            zero_above_datum_m,
            constituents,
            rayleigh,
            no_inference,
            nodal,
            no_qc,
            out,
        }),
        Command::Predict {
            constants,
            project,
            gauge,
            from,
            to,
            step_min,
            out,
            high_low_waters,
        } => {
            let constants = match (constants, project) {
                (Some(c), _) => c,
                (None, Some(p)) => match gauge_constants(&p, gauge.as_deref().unwrap_or("")) {
                    Ok(c) => c,
                    Err(e) => return report_failure(e),
                },
                (None, None) => return EXIT_CANNOT_RUN,
            };
            cmd_predict(&constants, &from, &to, step_min, out, high_low_waters)
        }
        Command::Demo { dir } => cmd_demo(dir),
    }
}

fn report_failure(e: anyhow::Error) -> i32 {
    eprintln!("ebbwise: {e:#}");
    EXIT_CANNOT_RUN
}

fn print_findings(findings: &[Finding]) {
    let mut err = std::io::stderr().lock();
    for f in findings {
        let _ = writeln!(err, "{f}");
    }
}

fn cmd_reduce(
    project_path: &Path,
    out: Option<PathBuf>,
    progress: bool,
    order: Option<&str>,
    no_uncertainty: bool,
) -> anyhow::Result<i32> {
    let (summary, _) = match run_reduce(project_path, out, progress, order, no_uncertainty)? {
        Ok(s) => s,
        Err(code) => return Ok(code),
    };
    Ok(
        if summary.count(SoundingStatus::Reduced) == summary.rows() {
            EXIT_OK
        } else {
            EXIT_INCOMPLETE
        },
    )
}

/// Loads and reduces; prints the summary. `Err(code)` when the inputs could not be loaded.
fn run_reduce(
    project_path: &Path,
    out: Option<PathBuf>,
    progress: bool,
    order: Option<&str>,
    no_uncertainty: bool,
) -> anyhow::Result<Result<(RunSummary, PathBuf), i32>> {
    let project = Project::load(project_path)?;
    let out_dir = out.unwrap_or_else(|| project.spec.output.dir.clone());
    let name = project.spec.name.clone();
    let loaded = match load(project, order) {
        Ok(mut l) => {
            if no_uncertainty {
                l.uncertainty = None;
            } else if order.is_some() && l.uncertainty.is_none() {
                eprintln!(
                    "ebbwise: --order needs an [uncertainty] section in the project (see docs/project-file.md)"
                );
                return Ok(Err(EXIT_CANNOT_RUN));
            }
            l
        }
        Err(findings) => {
            print_findings(&findings);
            eprintln!(
                "ebbwise: cannot reduce: fix the errors above (`ebbwise check` lists every problem)"
            );
            return Ok(Err(EXIT_CANNOT_RUN));
        }
    };
    print_findings(&loaded.warnings);
    let summary = reduce_project(
        &loaded,
        &ReduceOptions {
            out_dir: out_dir.clone(),
            progress,
            kind: ebbwise::run::reduce::RunKind::Reduce,
            only_files: None,
        },
    )?;
    let json = serde_json::to_vec_pretty(&summary)?;
    let summary_path = out_dir.join("reduce-summary.json");
    ebbwise::io::atomic::write_atomic(&summary_path, &json)?;
    let verdict = match build_qa_report(&loaded, &summary) {
        Some(report) => {
            let json_path = out_dir.join("qa-report.json");
            let html_path = out_dir.join("qa-report.html");
            ebbwise::io::atomic::write_atomic(&json_path, &serde_json::to_vec_pretty(&report)?)?;
            ebbwise::io::atomic::write_atomic(&html_path, render_html(&report).as_bytes())?;
            Some(format!(
                "  order {}: {:.1} % of {} reduced soundings within the allowed TVU (acceptance {:.0} %): {}; strictest order met: {}; dominant component: {}\n  QA report: {} and {}",
                report.chosen_order.name,
                100.0 * report.survey.share_within_chosen,
                report.survey.soundings,
                100.0 * report.acceptance_share,
                if report.survey.meets_chosen { "MET" } else { "NOT MET" },
                report.achieved_order.as_deref().unwrap_or("none"),
                report.dominant_component,
                html_path.display(),
                json_path.display()
            ))
        }
        None => {
            // A report left by an earlier run would not describe this one.
            for stale in ["qa-report.json", "qa-report.html"] {
                let _ = std::fs::remove_file(out_dir.join(stale));
            }
            Some(
                "  uncertainty: not computed (no [uncertainty] section in the project, or --no-uncertainty)"
                    .into(),
            )
        }
    };
    print_summary("reduce", &name, &summary, &summary_path, verdict.as_deref());
    Ok(Ok((summary, out_dir)))
}

fn print_summary(
    command: &str,
    name: &str,
    s: &RunSummary,
    summary_path: &Path,
    verdict: Option<&str>,
) {
    let mut e = std::io::stderr().lock();
    let _ = writeln!(e, "ebbwise {command}: {name}");
    for f in &s.files {
        let _ = writeln!(
            e,
            "  {} -> {} ({} rows{})",
            f.input.display(),
            f.output.display(),
            f.rows(),
            if f.blank_lines > 0 {
                format!(", {} blank lines skipped", f.blank_lines)
            } else {
                String::new()
            }
        );
    }
    let _ = writeln!(e, "  {:<16} {:>10}", "status", "soundings");
    for (st, n) in s.rows_by_status.iter() {
        let _ = writeln!(e, "  {st:<16} {n:>10}");
    }
    let _ = writeln!(
        e,
        "  {:<8} {:<10} {:<22} {:>10} {:>14} {:>14}",
        "zone", "formula", "gauges", "reduced", "no_gauge_data", "gauge_flagged"
    );
    for z in &s.zones {
        let _ = writeln!(
            e,
            "  {:<8} {:<10} {:<22} {:>10} {:>14} {:>14}",
            z.zone,
            z.mean_level_form,
            z.gauges.join("+"),
            z.reduced,
            z.no_gauge_data,
            z.gauge_flagged
        );
    }
    for f in &s.files {
        let mut shown = std::collections::HashMap::new();
        for ex in &f.examples {
            let k = shown.entry(ex.status).or_insert(0);
            *k += 1;
            if *k > 2 {
                continue;
            }
            let _ = writeln!(
                e,
                "  {}:{}: {}: {}",
                f.input.display(),
                ex.line,
                ex.status,
                ex.detail
            );
        }
    }
    for f in &s.files {
        if let Some(w) = f.sign_warning() {
            let _ = writeln!(e, "warning: {w}");
        }
    }
    if s.stale_partials_removed > 0 {
        let _ = writeln!(
            e,
            "  removed {} temporary file(s) left by an interrupted run",
            s.stale_partials_removed
        );
    }
    let _ = writeln!(e, "  summary: {}", summary_path.display());
    if let Some(v) = verdict {
        let _ = writeln!(e, "{v}");
    }
    let _ = writeln!(e, "{CAUTION}");
}

fn load_or_print(project_path: &Path) -> anyhow::Result<Result<ebbwise::run::load::Loaded, i32>> {
    let project = Project::load(project_path)?;
    match load(project, None) {
        Ok(l) => Ok(Ok(l)),
        Err(findings) => {
            print_findings(&findings);
            eprintln!(
                "ebbwise: cannot run: fix the errors above (`ebbwise check` lists every problem)"
            );
            Ok(Err(EXIT_CANNOT_RUN))
        }
    }
}

fn parse_utc_arg(s: Option<String>, what: &str) -> anyhow::Result<Option<f64>> {
    s.map(|s| {
        ebbwise::io::timefmt::parse_time(&s, ebbwise::io::timefmt::TimeFormat::Iso8601, None)
            .map_err(|m| anyhow::anyhow!("--{what}: {m}"))
    })
    .transpose()
}

fn cmd_correctors(
    project_path: &Path,
    out: Option<PathBuf>,
    step_min: f64,
    from: Option<String>,
    to: Option<String>,
    per_sounding: bool,
    per_line: bool,
) -> anyhow::Result<i32> {
    let from_s = parse_utc_arg(from, "from")?;
    let to_s = parse_utc_arg(to, "to")?;
    let loaded = match load_or_print(project_path)? {
        Ok(l) => l,
        Err(code) => return Ok(code),
    };
    let out_dir = out.unwrap_or_else(|| loaded.project.spec.output.dir.clone());
    let outcome = ebbwise::run::correctors::write_correctors(
        &loaded,
        &ebbwise::run::correctors::CorrectorsOptions {
            out_dir,
            step_min,
            from_s,
            to_s,
            per_sounding,
            per_line,
        },
    )?;
    let mut e = std::io::stderr().lock();
    let _ = writeln!(
        e,
        "ebbwise correctors: {} zones, {} to {}, every {step_min} min",
        loaded.zones.len(),
        ebbwise::compute::utc_label(outcome.span_s.0),
        ebbwise::compute::utc_label(outcome.span_s.1)
    );
    for (s, n) in &outcome.zone_rows_by_status {
        let _ = writeln!(e, "  {s:<14} {n:>8} zone-times");
    }
    if loaded.uncertainty.is_none() {
        let _ = writeln!(
            e,
            "  u_tide_m left empty: the project has no [uncertainty] section"
        );
    }
    for w in &outcome.warnings {
        let _ = writeln!(e, "warning: {w}");
    }
    for w in &outcome.written {
        let _ = writeln!(e, "  wrote {}", w.display());
    }
    let _ = writeln!(e, "{CAUTION}");
    Ok(EXIT_OK)
}

fn cmd_apply(
    corrections: &Path,
    soundings: Vec<PathBuf>,
    project_path: &Path,
    out: Option<PathBuf>,
) -> anyhow::Result<i32> {
    let loaded = match load_or_print(project_path)? {
        Ok(l) => l,
        Err(code) => return Ok(code),
    };
    let out_dir = out.unwrap_or_else(|| loaded.project.spec.output.dir.clone());
    let summary = ebbwise::run::correctors::apply_corrections(
        &loaded,
        corrections,
        soundings,
        out_dir.clone(),
    )?;
    let summary_path = out_dir.join("apply-summary.json");
    ebbwise::io::atomic::write_atomic(&summary_path, &serde_json::to_vec_pretty(&summary)?)?;
    for w in ebbwise::run::correctors::provenance_mismatches(&loaded, corrections) {
        eprintln!("warning: {w}");
    }
    print_summary(
        "apply",
        &format!(
            "{} (tide from {})",
            loaded.project.spec.name,
            corrections.display()
        ),
        &summary,
        &summary_path,
        None,
    );
    Ok(
        if summary.count(SoundingStatus::Reduced) == summary.rows() {
            EXIT_OK
        } else {
            EXIT_INCOMPLETE
        },
    )
}

fn cmd_check(project: &Path, json: bool) -> i32 {
    let report = check_project(project);
    if json {
        match serde_json::to_string_pretty(&report) {
            Ok(s) => {
                let _ = writeln!(std::io::stdout().lock(), "{s}");
            }
            Err(e) => {
                eprintln!("ebbwise: {e}");
                return EXIT_CANNOT_RUN;
            }
        }
    } else {
        print_findings(&report.findings);
        let span = report
            .sounding_span
            .as_ref()
            .map(|(a, b)| format!(", {a} to {b}"))
            .unwrap_or_default();
        eprintln!(
            "ebbwise check: {} error(s), {} warning(s); {} sounding rows read{span}",
            report.errors(),
            report.warnings(),
            report.sounding_rows
        );
    }
    if report.errors() > 0 {
        EXIT_INCOMPLETE
    } else {
        EXIT_OK
    }
}

fn cmd_qc_project(project_path: &Path, gauge: Option<&str>, out: Option<PathBuf>) -> i32 {
    let project = match Project::load(project_path) {
        Ok(p) => p,
        Err(e) => return report_failure(e.into()),
    };
    if let Some(g) = gauge {
        if !project.spec.gauges.iter().any(|x| x.id == g) {
            eprintln!(
                "ebbwise: the project has no gauge '{g}' (gauges: {})",
                project
                    .spec
                    .gauges
                    .iter()
                    .map(|x| x.id.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            );
            return EXIT_CANNOT_RUN;
        }
    }
    let out_dir = out.unwrap_or_else(|| project.spec.output.dir.join("qc"));
    let result = match load(project.clone(), None) {
        Ok(loaded) => ebbwise::run::qc::qc_project(&loaded, gauge, &out_dir),
        Err(findings) => {
            print_findings(&findings);
            eprintln!(
                "ebbwise qc: the project does not load as a whole; checking the gauge records alone"
            );
            ebbwise::run::qc::qc_records_only(
                &project,
                gauge,
                &out_dir,
                "the project did not load (see the errors above)",
            )
        }
    };
    match result {
        Ok(summary) => print_qc(&summary),
        Err(e) => report_failure(e.into()),
    }
}

fn cmd_qc_record(
    record: &Path,
    time_column: &str,
    height_column: &str,
    units: &str,
    zero_above_datum_m: Option<f64>,
    out: Option<PathBuf>,
) -> i32 {
    let zero_given = zero_above_datum_m.is_some();
    let zero_above_datum_m = zero_above_datum_m.unwrap_or(0.0);
    let units = match units {
        "m" => ebbwise::io::project::HeightUnit::Metre,
        "ft" => ebbwise::io::project::HeightUnit::Foot,
        "us_ft" => ebbwise::io::project::HeightUnit::UsSurveyFoot,
        other => {
            eprintln!("ebbwise: --units: expected m, ft or us_ft, found '{other}'");
            return EXIT_CANNOT_RUN;
        }
    };
    let mut spec = ebbwise::io::project::GaugeSpec::for_record(record, units, zero_above_datum_m);
    spec.time_column = time_column.to_string();
    spec.height_column = height_column.to_string();
    let r = match ebbwise::io::gauge_csv::read_gauge_record(&spec, None) {
        Ok(r) => r,
        Err(e) => return report_failure(e.into()),
    };
    // Without a project, the plausible band is centred on the record's median level.
    let mut levels = r.heights_m.clone();
    if !levels.is_empty() {
        let mid = levels.len() / 2;
        spec.mean_level_above_datum_m = *levels.select_nth_unstable_by(mid, f64::total_cmp).1;
    }
    let out_dir = out.unwrap_or_else(|| PathBuf::from("qc"));
    match ebbwise::run::qc::qc_single_record(
        &spec,
        &r,
        &ebbwise::io::project::QcSpec::default(),
        zero_given,
        &out_dir,
    ) {
        Ok(summary) => print_qc(&summary),
        Err(e) => report_failure(e.into()),
    }
}

fn print_qc(s: &ebbwise::run::qc::QcSummary) -> i32 {
    let mut o = std::io::stdout().lock();
    for g in &s.gauges {
        let _ = writeln!(
            o,
            "gauge {}: {} samples every {:.1} min, {} usable; noise σ {:.4} m; interpolation {}{}",
            g.gauge,
            g.samples,
            g.method.nominal_step_min,
            g.usable,
            g.noise_sigma_m,
            g.method.interpolation,
            g.method
                .lowpass_cutoff_min
                .map(|c| format!(", low-pass {c} min"))
                .unwrap_or_default()
        );
        for flag in ebbwise::compute::qc::QcFlag::ALL {
            let n = g.flags[flag.as_str()];
            if n == 0 {
                continue;
            }
            let _ = writeln!(o, "  {:<15} {n:>7}  {}", flag.as_str(), flag.meaning());
            for f in g
                .first_flagged
                .iter()
                .filter(|f| f.flag == flag.as_str())
                .take(2)
            {
                let _ = writeln!(
                    o,
                    "      line {:>6}  {}  {:>8.3} m  {}",
                    f.line, f.time_utc, f.level_above_datum_m, f.detail
                );
            }
        }
    }
    if !s.comparisons.is_empty() {
        let _ = writeln!(
            o,
            "\ngauge comparisons (a − b through the zoning's correctors):"
        );
        let _ = writeln!(
            o,
            "  {:<28} {:>6} {:>8} {:>7} {:>7} {:>9} {:>8}  verdict",
            "pair", "n", "mean_m", "std_m", "max_m", "drift_m/d", "lag_min"
        );
        for c in &s.comparisons {
            let _ = writeln!(
                o,
                "  {:<28} {:>6} {:>+8.3} {:>7.3} {:>7.3} {:>+9.4} {:>+8.1}  {}",
                c.pair,
                c.n,
                c.mean_m,
                c.std_m,
                c.max_abs_m,
                c.drift_m_per_day,
                c.best_lag_min,
                if c.flagged { "FLAGGED" } else { "ok" }
            );
            for f in &c.findings {
                let _ = writeln!(o, "      {f}");
            }
        }
    }
    if let Some(n) = &s.comparisons_note {
        let _ = writeln!(o, "\n{n}");
    }
    let _ = writeln!(o);
    for g in &s.gauges {
        for p in &g.outputs {
            let _ = writeln!(o, "wrote {}", p.display());
        }
    }
    for p in &s.outputs {
        let _ = writeln!(o, "wrote {}", p.display());
    }
    let _ = writeln!(o, "{CAUTION}");
    if s.anything_flagged() {
        EXIT_INCOMPLETE
    } else {
        EXIT_OK
    }
}

struct AnalyseArgs {
    record: Option<PathBuf>,
    project: Option<PathBuf>,
    gauge: Option<String>,
    time_column: String,
    height_column: String,
    units: String,
    zero_above_datum_m: Option<f64>,
    constituents: Option<Vec<String>>,
    rayleigh: f64,
    no_inference: bool,
    nodal: String,
    no_qc: bool,
    out: Option<PathBuf>,
}

fn parse_units(units: &str) -> anyhow::Result<ebbwise::io::project::HeightUnit> {
    Ok(match units {
        "m" => ebbwise::io::project::HeightUnit::Metre,
        "ft" => ebbwise::io::project::HeightUnit::Foot,
        "us_ft" => ebbwise::io::project::HeightUnit::UsSurveyFoot,
        other => anyhow::bail!("--units: expected m, ft or us_ft, found '{other}'"),
    })
}

fn cmd_analyse(a: AnalyseArgs) -> i32 {
    use ebbwise::compute::harmonic::{tide_type, AnalysisSettings, NodalMode};
    let run = || -> anyhow::Result<ebbwise::run::harmonics::AnalyseOutcome> {
        if !(a.rayleigh.is_finite() && a.rayleigh > 0.0) {
            anyhow::bail!(
                "--rayleigh: expected a positive number, found {}",
                a.rayleigh
            );
        }
        let settings = AnalysisSettings {
            rayleigh_factor: a.rayleigh,
            constituents: a.constituents.clone(),
            infer: !a.no_inference,
            nodal: if a.nodal == "centre" {
                NodalMode::Centre
            } else {
                NodalMode::PerSample
            },
        };
        match (&a.record, &a.project) {
            (Some(record), _) => {
                let units = parse_units(&a.units)?;
                let mut spec = ebbwise::io::project::GaugeSpec::for_record(
                    record,
                    units,
                    a.zero_above_datum_m.unwrap_or(0.0),
                );
                spec.time_column = a.time_column.clone();
                spec.height_column = a.height_column.clone();
                // The plausible band for QC is centred on the record's median.
                if let Ok(r) = ebbwise::io::gauge_csv::read_gauge_record(&spec, None) {
                    let mut v = r.heights_m.clone();
                    if !v.is_empty() {
                        let mid = v.len() / 2;
                        spec.mean_level_above_datum_m =
                            *v.select_nth_unstable_by(mid, f64::total_cmp).1;
                    }
                }
                let out = a
                    .out
                    .clone()
                    .unwrap_or_else(|| PathBuf::from(format!("{}.constants.toml", spec.id)));
                let levels = if a.zero_above_datum_m.is_some() {
                    "above chart datum"
                } else {
                    "above the record's zero"
                };
                let qc = ebbwise::io::project::QcSpec::default();
                Ok(ebbwise::run::harmonics::analyse_gauge(
                    &spec,
                    None,
                    (!a.no_qc).then_some(&qc),
                    &settings,
                    None,
                    levels,
                    &out,
                )?)
            }
            (None, Some(project)) => {
                let p = Project::load(project)?;
                let id = a.gauge.clone().unwrap_or_default();
                let Some(g) = p.spec.gauges.iter().find(|g| g.id == id) else {
                    anyhow::bail!(
                        "the project has no gauge '{id}' (gauges: {})",
                        p.spec
                            .gauges
                            .iter()
                            .map(|g| g.id.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    );
                };
                let out = a
                    .out
                    .clone()
                    .unwrap_or_else(|| p.spec.output.dir.join(format!("{}.constants.toml", g.id)));
                Ok(ebbwise::run::harmonics::analyse_gauge(
                    g,
                    p.gauge_naive_offset(g),
                    (!a.no_qc).then_some(&p.spec.qc),
                    &settings,
                    Some(g.id.clone()),
                    "above chart datum",
                    &out,
                )?)
            }
            (None, None) => anyhow::bail!("give a record, or --project and --gauge"),
        }
    };
    let o = match run() {
        Ok(o) => o,
        Err(e) => return report_failure(e),
    };
    let an = &o.analysis;
    let mut w = std::io::stdout().lock();
    let _ = writeln!(
        w,
        "ebbwise analyse: {} samples from {} to {} ({:.1} days){}; nodal corrections {}",
        an.n_samples,
        ebbwise::compute::utc_label(an.span_s.0),
        ebbwise::compute::utc_label(an.span_s.1),
        (an.span_s.1 - an.span_s.0) / 86400.0,
        if o.set_aside > 0 {
            format!(
                ", {} of {} samples set aside by QC",
                o.set_aside, o.samples_read
            )
        } else {
            String::new()
        },
        an.nodal.as_str()
    );
    let _ = writeln!(
        w,
        "  Z0 {:.4} m ± {:.4} (1σ), levels {}",
        an.z0_m, an.u_z0_m, o.levels
    );
    let _ = writeln!(
        w,
        "  {:<8} {:>12} {:>9} {:>10} {:>8}  {:>10}",
        "name", "speed °/h", "H m", "u(H) m", "G °", "u(G) °"
    );
    let mut shown: Vec<_> = an.fitted.iter().collect();
    shown.sort_by(|x, y| y.amplitude_m.total_cmp(&x.amplitude_m));
    for f in &shown {
        let _ = writeln!(
            w,
            "  {:<8} {:>12.7} {:>9.4} {:>10.4} {:>8.2}  {:>10.2}{}",
            f.constituent.name,
            f.constituent.speed_deg_per_h,
            f.amplitude_m,
            f.u_amplitude_m,
            f.phase_deg,
            f.u_phase_deg,
            f.inferred_from
                .map(|(r, k)| format!("  inferred from {r} (×{k:.4})"))
                .unwrap_or_default()
        );
    }
    let _ = writeln!(
        w,
        "  residual RMS {:.4} m; variance explained {:.2} %; {} constituents fitted, {} inferred, {} {}",
        an.residual_rms_m,
        100.0 * an.variance_explained,
        an.fitted.iter().filter(|f| f.inferred_from.is_none()).count(),
        an.fitted.iter().filter(|f| f.inferred_from.is_some()).count(),
        an.left_out.len(),
        if an.rayleigh_factor.is_some() {
            "candidates left out or inferred by the Rayleigh criterion"
        } else {
            "notes on the given list"
        }
    );
    if an.rayleigh_factor.is_none() {
        for (name, why) in &an.left_out {
            let _ = writeln!(w, "  note: {name} {why}");
        }
    }
    if let Some(ff) = an.form_factor() {
        let missing: Vec<&str> = ["K1", "O1", "M2", "S2"]
            .into_iter()
            .filter(|n| !an.fitted.iter().any(|f| f.constituent.name == *n))
            .collect();
        let _ = writeln!(
            w,
            "  form factor F = (K1 + O1)/(M2 + S2) = {ff:.3}: {}{}",
            tide_type(ff),
            if missing.is_empty() {
                String::new()
            } else {
                format!(
                    " (without {}: not resolved by this record)",
                    missing.join(", ")
                )
            }
        );
    }
    let days = (an.span_s.1 - an.span_s.0) / 86400.0;
    if days < 28.0 {
        let _ = writeln!(
            w,
            "  note: a {days:.1}-day record separates few constituents; constants from less than four weeks suit short-term prediction only"
        );
    }
    let _ = writeln!(w, "wrote {}", o.written.display());
    let _ = writeln!(w, "{CAUTION}");
    EXIT_OK
}

/// The constants file a project names for a gauge.
fn gauge_constants(project: &Path, gauge: &str) -> anyhow::Result<PathBuf> {
    let p = Project::load(project)?;
    let Some(g) = p.spec.gauges.iter().find(|g| g.id == gauge) else {
        anyhow::bail!(
            "the project has no gauge '{gauge}' (gauges: {})",
            p.spec
                .gauges
                .iter()
                .map(|g| g.id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        );
    };
    g.constants.clone().ok_or_else(|| {
        anyhow::anyhow!(
            "{}: gauge '{gauge}' names no constants file (add `constants = \"….constants.toml\"` to its [[gauge]] table; `ebbwise analyse --project … --gauge {gauge}` writes one)",
            project.display()
        )
    })
}

fn cmd_predict(
    constants: &Path,
    from: &str,
    to: &str,
    step_min: f64,
    out: Option<PathBuf>,
    high_low_waters: Option<PathBuf>,
) -> i32 {
    let run = || -> anyhow::Result<ebbwise::run::harmonics::PredictOutcome> {
        let t0 = parse_utc_arg(Some(from.to_string()), "from")?.unwrap_or(0.0);
        let t1 = parse_utc_arg(Some(to.to_string()), "to")?.unwrap_or(0.0);
        if !(step_min.is_finite() && step_min > 0.0) {
            anyhow::bail!("--step-min: expected a positive number of minutes, found {step_min}");
        }
        let stem = constants
            .file_name()
            .map(|s| {
                s.to_string_lossy()
                    .trim_end_matches(".toml")
                    .trim_end_matches(".constants")
                    .to_string()
            })
            .unwrap_or_else(|| "tide".into());
        let out = out.unwrap_or_else(|| PathBuf::from(format!("{stem}.prediction.csv")));
        let ex =
            high_low_waters.unwrap_or_else(|| PathBuf::from(format!("{stem}.high-low-waters.csv")));
        Ok(ebbwise::run::harmonics::predict_file(
            constants,
            t0,
            t1,
            step_min * 60.0,
            &out,
            &ex,
        )?)
    };
    match run() {
        Ok(o) => {
            let mut w = std::io::stdout().lock();
            let highs = o.high_low_waters.iter().filter(|e| e.high).count();
            let _ = writeln!(
                w,
                "ebbwise predict: {} values every {step_min} min from {from} to {to}, levels {}; {} high and {} low waters",
                o.n,
                o.levels.as_deref().unwrap_or("as in the constants file"),
                highs,
                o.high_low_waters.len() - highs
            );
            if let (Some(lo), Some(hi)) = (
                o.high_low_waters
                    .iter()
                    .filter(|e| !e.high)
                    .min_by(|a, b| a.height_m.total_cmp(&b.height_m)),
                o.high_low_waters
                    .iter()
                    .filter(|e| e.high)
                    .max_by(|a, b| a.height_m.total_cmp(&b.height_m)),
            ) {
                let _ = writeln!(
                    w,
                    "  lowest low water {:.3} m at {}; highest high water {:.3} m at {}",
                    lo.height_m,
                    ebbwise::compute::utc_label(lo.t_s.round()),
                    hi.height_m,
                    ebbwise::compute::utc_label(hi.t_s.round())
                );
            }
            for p in &o.written {
                let _ = writeln!(w, "wrote {}", p.display());
            }
            let _ = writeln!(w, "{CAUTION}");
            EXIT_OK
        }
        Err(e) => report_failure(e),
    }
}

fn cmd_demo(dir: Option<PathBuf>) -> i32 {
    let dir = dir.unwrap_or_else(|| {
        let here = PathBuf::from("zoning-demo");
        if here.join("project.toml").exists() {
            here
        } else {
            Path::new(env!("CARGO_MANIFEST_DIR")).join("zoning-demo")
        }
    });
    let project = dir.join("project.toml");
    if !project.exists() {
        eprintln!("ebbwise demo: no demo project at {}", project.display());
        return EXIT_CANNOT_RUN;
    }
    match run_reduce(&project, None, true, None, false) {
        Ok(Ok((_, out_dir))) => {
            println!("Demo survey reduced. Results in {}/", out_dir.display());
            EXIT_OK
        }
        Ok(Err(code)) => code,
        Err(e) => report_failure(e),
    }
}
