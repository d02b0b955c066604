//! `ebbwise predict`: the tide from a constants file on a regular grid, and its high and low
//! waters; either file can go to stdout (`-`); the summary on stderr.

use std::io::Write;
use std::path::{Path, PathBuf};

use ebbwise::io::atomic::Sink;
use ebbwise::io::project::Project;
use ebbwise::io::timefmt::utc_label;
use ebbwise::run::harmonics::{predict_to, PredictOutcome};
use ebbwise::CAUTION;

use super::common::{find_gauge, parse_utc, DataOut, Stdout};
use super::Outcome;

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The constants file (written by `ebbwise analyse`); or give --project and --gauge.
    #[arg(required_unless_present = "project", conflicts_with = "project")]
    constants: Option<PathBuf>,
    /// A project file whose gauge names its constants (`[[gauge]] constants`).
    #[arg(long, requires = "gauge")]
    project: Option<PathBuf>,
    /// With --project: the gauge id.
    #[arg(long, value_name = "ID")]
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
    /// The series file; `-` writes it to stdout. Default: `<NAME>.prediction.csv` in the
    /// current folder, NAME being the constants file's name without `.constants.toml` (or
    /// `.toml`).
    #[arg(long, value_name = "FILE")]
    out: Option<PathBuf>,
    /// The high and low water file; `-` writes it to stdout. Default:
    /// `<NAME>.high-low-waters.csv` in the current folder, NAME as for --out.
    #[arg(long, value_name = "FILE")]
    high_low_waters: Option<PathBuf>,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    let t0 = parse_utc(&a.from, "from")?;
    let t1 = parse_utc(&a.to, "to")?;
    if !(a.step_min.is_finite() && a.step_min > 0.0) {
        anyhow::bail!(
            "--step-min: expected a positive number of minutes, found {}",
            a.step_min
        );
    }
    let constants = match (&a.constants, &a.project) {
        (Some(c), _) => c.clone(),
        (None, Some(p)) => gauge_constants(p, a.gauge.as_deref().unwrap_or_default())?,
        (None, None) => anyhow::bail!("give a constants file, or --project and --gauge"),
    };
    let name = constants_name(&constants);
    let series = a.out.clone().map_or_else(
        || DataOut::File(PathBuf::from(format!("{name}.prediction.csv"))),
        DataOut::from_option,
    );
    let turning = a.high_low_waters.clone().map_or_else(
        || DataOut::File(PathBuf::from(format!("{name}.high-low-waters.csv"))),
        DataOut::from_option,
    );
    if series == DataOut::Stdout && turning == DataOut::Stdout {
        anyhow::bail!("--out and --high-low-waters cannot both be `-`: give one of them a file");
    }
    let mut stdout = Stdout::lock();
    let (series_sink, turning_sink) = match (&series, &turning) {
        (DataOut::File(s), DataOut::File(t)) => (Sink::File(s), Sink::File(t)),
        (DataOut::Stdout, DataOut::File(t)) => (Sink::Stream(&mut stdout), Sink::File(t)),
        (DataOut::File(s), DataOut::Stdout) => (Sink::File(s), Sink::Stream(&mut stdout)),
        (DataOut::Stdout, DataOut::Stdout) => unreachable!("refused above"),
    };
    let o = predict_to(
        &constants,
        t0,
        t1,
        a.step_min * 60.0,
        series_sink,
        turning_sink,
    )?;
    drop(stdout);
    print_prediction(
        &a,
        &o,
        series == DataOut::Stdout,
        turning == DataOut::Stdout,
    );
    Ok(Outcome::Done)
}

/// The name defaults are built from: the file name without `.constants.toml`, or `.toml`.
fn constants_name(constants: &Path) -> String {
    let file = constants
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "tide".into());
    let file = file.strip_suffix(".toml").unwrap_or(&file);
    file.strip_suffix(".constants").unwrap_or(file).to_string()
}

/// The constants file a project names for a gauge.
fn gauge_constants(project: &Path, gauge: &str) -> anyhow::Result<PathBuf> {
    let p = Project::load(project)?;
    let g = find_gauge(&p, gauge)?;
    g.constants.clone().ok_or_else(|| {
        anyhow::anyhow!(
            "{}: gauge '{gauge}' names no constants file (add `constants = \"….constants.toml\"` to its [[gauge]] table; `ebbwise analyse --project … --gauge {gauge}` writes one)",
            project.display()
        )
    })
}

/// The prediction's summary, on stderr.
fn print_prediction(a: &Args, o: &PredictOutcome, series_to_stdout: bool, turning_to_stdout: bool) {
    let mut w = std::io::stderr().lock();
    let highs = o.high_low_waters.iter().filter(|e| e.high).count();
    let _ = writeln!(
        w,
        "ebbwise predict: {} values every {} min from {} to {}, levels {}; {} high and {} low waters",
        o.n,
        a.step_min,
        a.from,
        a.to,
        o.levels.as_deref().unwrap_or("as in the constants file"),
        highs,
        o.high_low_waters.len() - highs
    );
    for warning in &o.warnings {
        let _ = writeln!(w, "  warning: {warning}");
    }
    if let (Some(lo), Some(hi)) = (
        o.high_low_waters
            .iter()
            .filter(|e| !e.high)
            .min_by(|x, y| x.height_m.total_cmp(&y.height_m)),
        o.high_low_waters
            .iter()
            .filter(|e| e.high)
            .max_by(|x, y| x.height_m.total_cmp(&y.height_m)),
    ) {
        let _ = writeln!(
            w,
            "  lowest low water {:.3} m at {}; highest high water {:.3} m at {}",
            lo.height_m,
            utc_label(lo.t_s.round()),
            hi.height_m,
            utc_label(hi.t_s.round())
        );
    }
    for p in &o.written {
        let _ = writeln!(w, "wrote {}", p.display());
    }
    if series_to_stdout {
        let _ = writeln!(w, "series written to stdout");
    }
    if turning_to_stdout {
        let _ = writeln!(w, "high and low waters written to stdout");
    }
    let _ = writeln!(w, "{CAUTION}");
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The names `--help` promises: `.constants.toml` or `.toml` taken off, once.
    #[test]
    fn default_name_drops_the_constants_suffix_once() {
        assert_eq!(constants_name(Path::new("d/month.constants.toml")), "month");
        assert_eq!(constants_name(Path::new("month.toml")), "month");
        assert_eq!(constants_name(Path::new("a.toml.toml")), "a.toml");
        assert_eq!(constants_name(Path::new("tide.txt")), "tide.txt");
    }
}
