//! `ebbwise correctors`: the tide-correction files (per zone, per line, per sounding) and their
//! provenance sidecars.

use std::io::Write;
use std::path::PathBuf;

use ebbwise::run::correctors::{write_correctors, CorrectorsOptions};
use ebbwise::CAUTION;

use super::common::{load_or_report, out_folder, parse_utc};
use super::Outcome;

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The project file (TOML).
    project: PathBuf,
    /// Output folder (default: the project's `[output] dir`).
    #[arg(long, value_name = "DIR")]
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
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    let out = out_folder(a.out)?;
    let from_s = a
        .from
        .as_deref()
        .map(|t| parse_utc(t, "from"))
        .transpose()?;
    let to_s = a.to.as_deref().map(|t| parse_utc(t, "to")).transpose()?;
    let loaded = load_or_report(&a.project)?;
    let out_dir = out.unwrap_or_else(|| loaded.project.spec.output.dir.clone());
    let outcome = write_correctors(
        &loaded,
        &CorrectorsOptions {
            out_dir,
            step_min: a.step_min,
            from_s,
            to_s,
            per_sounding: a.per_sounding,
            per_line: a.per_line,
        },
    )?;
    let mut e = std::io::stderr().lock();
    let _ = writeln!(
        e,
        "ebbwise correctors: {} zones, {} to {}, every {} min",
        loaded.zones.len(),
        ebbwise::io::timefmt::utc_label(outcome.span_s.0),
        ebbwise::io::timefmt::utc_label(outcome.span_s.1),
        a.step_min
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
    // The files are written whatever their statuses: `missing` values are data, not failures.
    Ok(Outcome::Done)
}
