//! `ebbwise reduce`: every sounding of a project to chart datum, the run summary, and with
//! uncertainty the QA report. Also the summary printing that `apply` and `demo` share.

use std::io::Write;
use std::path::{Path, PathBuf};

use ebbwise::compute::reduce::SoundingStatus;
use ebbwise::io::atomic::write_atomic;
use ebbwise::io::report_html::render_html;
use ebbwise::io::sounding_export::{FAILING_FILE, UNREDUCED_FILE};
use ebbwise::run::load::{load, output_clashes};
use ebbwise::run::qa_report::build_qa_report;
use ebbwise::run::reduce::{reduce_project, run_outputs, ReduceOptions, RunKind, RunSummary};
use ebbwise::CAUTION;

use super::common::{load_project_or_report, out_folder, print_findings, FormatArg};
use super::progress::TerminalBar;
use super::{Outcome, Reported};
use ebbwise::io::project::TableFormat;

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The project file (TOML).
    project: PathBuf,
    /// Output folder (default: the project's `[output] dir`).
    #[arg(long, value_name = "DIR")]
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
    /// Format of the reduced files (overrides the project's `[output] format`).
    #[arg(long, value_enum)]
    format: Option<FormatArg>,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    if let Some(n) = a.threads {
        if n == 0 {
            anyhow::bail!("--threads must be at least 1");
        }
        let _ = rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build_global();
    }
    let (summary, _) = reduce_and_report(
        &a.project,
        out_folder(a.out)?,
        !a.no_progress,
        a.order.as_deref(),
        a.no_uncertainty,
        a.format.map(FormatArg::format),
    )?;
    Ok(Outcome::of_reduction(&summary))
}

/// Loads and reduces a project, writes `reduce-summary.json` and, with uncertainty, the QA
/// report, and prints the summary on stderr. Returns the summary and the output folder.
pub fn reduce_and_report(
    project_path: &Path,
    out: Option<PathBuf>,
    progress: bool,
    order: Option<&str>,
    no_uncertainty: bool,
    format: Option<TableFormat>,
) -> anyhow::Result<(RunSummary, PathBuf)> {
    let mut project = load_project_or_report(project_path, "reduce")?;
    if let Some(f) = format {
        project.spec.output.format = f;
    }
    let out_dir = out.unwrap_or_else(|| project.spec.output.dir.clone());
    let name = project.spec.name.clone();
    let loaded = match load(project, order) {
        Ok(mut l) => {
            if no_uncertainty {
                l.uncertainty = None;
            } else if order.is_some() && l.uncertainty.is_none() {
                anyhow::bail!(
                    "--order needs an [uncertainty] section in the project (see docs/project-file.md)"
                );
            }
            l
        }
        Err(findings) => {
            print_findings(&findings);
            eprintln!(
                "ebbwise: cannot reduce: fix the errors above (`ebbwise check` lists every problem)"
            );
            return Err(Reported.into());
        }
    };
    let clashes = output_clashes(
        &loaded.project,
        &run_outputs(&loaded.project, &out_dir, RunKind::Reduce, None),
        &[],
    );
    if !clashes.is_empty() {
        print_findings(&clashes);
        eprintln!(
            "ebbwise: cannot reduce: fix the errors above (`ebbwise check` lists every problem)"
        );
        return Err(Reported.into());
    }
    print_findings(&loaded.warnings);
    let bar = TerminalBar::default();
    let summary = reduce_project(
        &loaded,
        &ReduceOptions {
            out_dir: out_dir.clone(),
            progress: progress.then_some(&bar as &dyn ebbwise::run::reduce::Progress),
            kind: RunKind::Reduce,
            only_files: None,
        },
    )?;
    let summary_path = out_dir.join("reduce-summary.json");
    write_atomic(&summary_path, &serde_json::to_vec_pretty(&summary)?)?;
    let verdict = write_qa_report(&loaded, &summary, &out_dir)?;
    print_run_summary("reduce", &name, &summary, &summary_path, Some(&verdict));
    Ok((summary, out_dir))
}

/// With uncertainty, writes the QA report (`qa-report.json` and `.html`) of a run into `out_dir`
/// and returns the summary's verdict lines; without, removes a report an earlier run left.
pub fn write_qa_report(
    loaded: &ebbwise::run::load::Loaded,
    summary: &RunSummary,
    out_dir: &Path,
) -> anyhow::Result<String> {
    Ok(match build_qa_report(loaded, summary)? {
        Some(report) => {
            let json_path = out_dir.join("qa-report.json");
            let html_path = out_dir.join("qa-report.html");
            write_atomic(&json_path, &serde_json::to_vec_pretty(&report)?)?;
            write_atomic(&html_path, render_html(&report).as_bytes())?;
            if report.exports.is_empty() {
                // Turned off ([output] geojson_exports = false): none left from an earlier run.
                for stale in [FAILING_FILE, UNREDUCED_FILE] {
                    let _ = std::fs::remove_file(out_dir.join(stale));
                }
            }
            let (within, total) = report.within_chosen_of_all();
            let judged = report.survey.soundings;
            let unreduced = total
                - report.rows_by_status.get(SoundingStatus::Reduced)
                - report.rows_by_status.get(SoundingStatus::GapFilled);
            format!(
                "  order {}: {:.1} % of {} judged (reduced) soundings within the TVU limit, {:.1} % of all {}; acceptance {:.0} % (the project's rule): {}; strictest order met on the TVU limit alone: {}; dominant component: {}\n  QA report: {} and {}\n  {}",
                report.chosen_order.name,
                100.0 * report.survey.share_within_chosen,
                report.survey.soundings,
                100.0 * report.share_within_of_all(),
                total,
                100.0 * report.acceptance_share,
                if report.survey.meets_chosen { "MET" } else { "NOT MET" },
                report.achieved_order.as_deref().unwrap_or("none"),
                report.dominant_component,
                html_path.display(),
                json_path.display(),
                if report.exports.is_empty() {
                    "exports (GeoJSON): not written ([output] geojson_exports = false)".to_string()
                } else {
                    format!(
                        "exports (GeoJSON): {} failing soundings in {}, {unreduced} unreduced in {}",
                        judged - within,
                        out_dir.join(FAILING_FILE).display(),
                        out_dir.join(UNREDUCED_FILE).display()
                    )
                }
            )
        }
        None => {
            // A report left by an earlier run would not describe this one.
            for stale in [
                "qa-report.json",
                "qa-report.html",
                FAILING_FILE,
                UNREDUCED_FILE,
            ] {
                let _ = std::fs::remove_file(out_dir.join(stale));
            }
            "  uncertainty: not computed (no [uncertainty] section in the project, or --no-uncertainty)"
                .into()
        }
    })
}

/// The summary of a streaming run (`reduce`, `apply`), on stderr.
pub fn print_run_summary(
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
    let continuous = matches!(s.tide_model, "corrector_field" | "astronomical_residual");
    if continuous {
        let _ = writeln!(
            e,
            "  tide: continuous between the gauges ({}, [tide_field]); the zones only bound the area and report",
            s.tide_model
        );
    }
    let fw = s
        .zones
        .iter()
        .map(|z| z.mean_level_form.len())
        .max()
        .unwrap_or(0)
        .max(10);
    let _ = writeln!(
        e,
        "  {:<8} {:<fw$} {:<22} {:>10} {:>10} {:>14} {:>14}",
        "zone",
        if continuous { "tide" } else { "formula" },
        "gauges",
        "reduced",
        "gap_filled",
        "no_gauge_data",
        "gauge_flagged"
    );
    for z in &s.zones {
        let _ = writeln!(
            e,
            "  {:<8} {:<fw$} {:<22} {:>10} {:>10} {:>14} {:>14}",
            z.zone,
            z.mean_level_form,
            z.gauges.join("+"),
            z.reduced,
            z.gap_filled,
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
