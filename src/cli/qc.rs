//! `ebbwise qc`: quality control of a project's gauge records (or of one record file) and the
//! gauge-to-gauge comparisons; the summary on stderr.

use std::io::Write;
use std::path::PathBuf;

use ebbwise::compute::qc::QcFlag;
use ebbwise::io::gauge_csv::read_gauge_record;
use ebbwise::io::project::{GaugeSpec, Project, QcSpec};
use ebbwise::run::load::load;
use ebbwise::run::qc::{qc_project, qc_records_only, qc_single_record, QcSummary};
use ebbwise::CAUTION;

use super::common::{find_gauge, median_m, out_folder, print_findings, Units};
use super::Outcome;

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The project file (TOML): every gauge, and the comparisons its zoning allows.
    #[arg(required_unless_present = "record", conflicts_with = "record")]
    project: Option<PathBuf>,
    /// Only this gauge and the comparisons it takes part in; the summary is then
    /// `qc-summary.<ID>.json` (and `gauge-differences.<ID>.csv`), never `qc-summary.json`.
    #[arg(long, value_name = "ID")]
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
    /// With --record: units of the heights.
    #[arg(long, value_enum, default_value = "m", requires = "record")]
    units: Units,
    /// With --record: height of the gauge zero above chart datum, metres (levels are then
    /// above chart datum; without it, above the record's zero).
    #[arg(long, requires = "record", allow_hyphen_values = true)]
    zero_above_datum_m: Option<f64>,
    /// Output folder (default: `<project output dir>/qc`, or `./qc` with --record).
    #[arg(long, value_name = "DIR")]
    out: Option<PathBuf>,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    let out = out_folder(a.out.clone())?;
    let summary = match (&a.project, &a.record) {
        (Some(project_path), _) => {
            let project = Project::load(project_path)?;
            if let Some(g) = &a.gauge {
                find_gauge(&project, g)?;
            }
            let out_dir = out.unwrap_or_else(|| project.spec.output.dir.join("qc"));
            let only = a.gauge.as_deref();
            match load(project.clone(), None) {
                Ok(loaded) => qc_project(&loaded, only, &out_dir)?,
                Err(findings) => {
                    print_findings(&findings);
                    eprintln!(
                        "ebbwise qc: the project does not load as a whole; checking the gauge records alone"
                    );
                    qc_records_only(
                        &project,
                        only,
                        &out_dir,
                        "the project did not load (see the errors above)",
                    )?
                }
            }
        }
        (None, Some(record)) => {
            let zero_given = a.zero_above_datum_m.is_some();
            let mut spec =
                GaugeSpec::for_record(record, a.units.into(), a.zero_above_datum_m.unwrap_or(0.0));
            spec.time_column = a.time_column.clone();
            spec.height_column = a.height_column.clone();
            let r = read_gauge_record(&spec, None)?;
            // Without a project, the plausible band is centred on the record's median level.
            if let Some(m) = median_m(&r.heights_m) {
                spec.mean_level_above_datum_m = m;
            }
            let out_dir = out.unwrap_or_else(|| PathBuf::from("qc"));
            qc_single_record(&spec, &r, &QcSpec::default(), zero_given, &out_dir)?
        }
        (None, None) => anyhow::bail!("give a project file or --record"),
    };
    print_qc(&summary);
    Ok(Outcome::unless(summary.anything_flagged()))
}

/// The QC summary, on stderr.
fn print_qc(s: &QcSummary) {
    let mut o = std::io::stderr().lock();
    if s.qc_in_reductions == Some(false) {
        let _ = writeln!(
            o,
            "warning: quality control ran on the records here, but the project sets [qc] enabled = false: its reductions use every sample unchecked, including those set aside below"
        );
    }
    for g in &s.gauges {
        let _ = writeln!(
            o,
            "gauge {}: {} samples every {:.1} min, {} usable, {} set aside by quality control; noise σ {:.4} m; interpolation {}{}",
            g.gauge,
            g.samples,
            g.method.nominal_step_min,
            g.usable,
            g.set_aside,
            g.noise_sigma_m,
            g.method.interpolation,
            g.method
                .lowpass_cutoff_min
                .map(|c| format!(", low-pass {c} min"))
                .unwrap_or_default()
        );
        let l = &g.limits;
        let _ = writeln!(
            o,
            "  rate limit {:.2} m/h ({}); flat line {} readings over {:.0} min ({}){}",
            l.max_rate_m_per_h,
            match l.max_rate_from {
                "record" => format!(
                    "{} × the record's own {:.2} m/h",
                    ebbwise::compute::qc::RATE_RECORD_FACTOR,
                    l.record_fast_rate_m_per_h.unwrap_or(f64::NAN)
                ),
                "project" => "set in [qc]".to_string(),
                _ => "the default floor".to_string(),
            },
            l.flat_min_samples,
            l.flat_min_duration_min,
            if l.flat_rule_from == "project" {
                "set in [qc]"
            } else {
                "default"
            },
            if l.stands_excused {
                format!(
                    ", stands at turning points excused ({} found; readings to {:.4} m)",
                    l.stands, l.reading_resolution_m
                )
            } else {
                String::new()
            }
        );
        for flag in QcFlag::ALL {
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
                    f.line,
                    f.time_utc,
                    f.tide_m.or(f.level_above_record_zero_m).unwrap_or(f64::NAN),
                    f.detail
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
}
