//! Helpers shared by several commands: findings on stderr, data on stdout, the checks of output
//! options, gauge look-up and height units.

use std::io::Write;
use std::path::{Path, PathBuf};

use ebbwise::io::error::Finding;
use ebbwise::io::project::{GaugeSpec, HeightUnit, Project};
use ebbwise::run::load::{load, Loaded};

use super::Reported;

/// Prints findings on stderr, one a line.
pub fn print_findings(findings: &[Finding]) {
    let mut err = std::io::stderr().lock();
    for f in findings {
        let _ = writeln!(err, "{f}");
    }
}

/// Loads a project and its inputs; on errors prints them and fails with [`Reported`].
pub fn load_or_report(project_path: &Path) -> anyhow::Result<Loaded> {
    let project = load_project_or_report(project_path, "run")?;
    match load(project, None) {
        Ok(l) => Ok(l),
        Err(findings) => {
            print_findings(&findings);
            eprintln!(
                "ebbwise: cannot run: fix the errors above (`ebbwise check` lists every problem)"
            );
            Err(Reported.into())
        }
    }
}

/// Reads the project file; on failure prints every problem of it and that `what` cannot go on.
pub fn load_project_or_report(project_path: &Path, what: &str) -> anyhow::Result<Project> {
    match Project::load_all(project_path) {
        Ok(p) => Ok(p),
        // One problem (a missing or unreadable file, a TOML error) is said as the error itself.
        Err(mut errors) if errors.len() == 1 => Err(errors.remove(0).into()),
        Err(errors) => {
            let findings: Vec<_> = errors
                .into_iter()
                .map(ebbwise::io::error::Finding::from)
                .collect();
            print_findings(&findings);
            eprintln!(
                "ebbwise: cannot {what}: fix the errors above (`ebbwise check` lists every problem)"
            );
            Err(Reported.into())
        }
    }
}

/// Parses an ISO 8601 time with offset given to option `--{option}`; UTC seconds.
pub fn parse_utc(text: &str, option: &str) -> anyhow::Result<f64> {
    ebbwise::io::timefmt::parse_time(text, ebbwise::io::timefmt::TimeFormat::Iso8601, None)
        .map_err(|m| anyhow::anyhow!("--{option}: {m}"))
}

/// The `--out` folder of a command that writes several files, as given. `-` is refused:
/// several files cannot go to stdout.
pub fn out_folder(out: Option<PathBuf>) -> anyhow::Result<Option<PathBuf>> {
    match out {
        Some(p) if is_stdout(&p) => anyhow::bail!(
            "--out -: this command writes several files into a folder; give a folder, not `-`"
        ),
        out => Ok(out),
    }
}

/// Whether a path option asks for stdout.
pub fn is_stdout(p: &Path) -> bool {
    p.as_os_str() == "-"
}

/// Where one data file goes: a file, or stdout when the user gave `-`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum DataOut {
    /// This file.
    File(PathBuf),
    /// Standard output.
    Stdout,
}

impl DataOut {
    /// From an option's value: `-` is stdout.
    pub fn from_option(p: PathBuf) -> Self {
        if is_stdout(&p) {
            DataOut::Stdout
        } else {
            DataOut::File(p)
        }
    }
}

/// Standard output for data. A closed pipe (`ebbwise predict … --out - | head`) is not an
/// error: what follows is dropped.
pub struct Stdout {
    inner: std::io::StdoutLock<'static>,
    closed: bool,
}

impl Stdout {
    /// Locks standard output.
    pub fn lock() -> Self {
        Stdout {
            inner: std::io::stdout().lock(),
            closed: false,
        }
    }
}

impl Write for Stdout {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        if self.closed {
            return Ok(buf.len());
        }
        match self.inner.write(buf) {
            Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => {
                self.closed = true;
                Ok(buf.len())
            }
            r => r,
        }
    }

    fn flush(&mut self) -> std::io::Result<()> {
        if self.closed {
            return Ok(());
        }
        match self.inner.flush() {
            Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => {
                self.closed = true;
                Ok(())
            }
            r => r,
        }
    }
}

/// Writes bytes to standard output ([`Stdout`]: a closed pipe is not an error).
pub fn write_stdout(bytes: &[u8]) -> anyhow::Result<()> {
    let mut out = Stdout::lock();
    out.write_all(bytes)?;
    out.flush()?;
    Ok(())
}

/// A project's gauge by id; the error lists the project's gauges.
pub fn find_gauge<'a>(project: &'a Project, id: &str) -> anyhow::Result<&'a GaugeSpec> {
    project
        .spec
        .gauges
        .iter()
        .find(|g| g.id == id)
        .ok_or_else(|| {
            anyhow::anyhow!(
                "the project has no gauge '{id}' (gauges: {})",
                project
                    .spec
                    .gauges
                    .iter()
                    .map(|g| g.id.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            )
        })
}

/// Units of a record's heights (`--units`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Units {
    /// Metres.
    #[value(name = "m")]
    Metre,
    /// International feet (0.3048 m).
    #[value(name = "ft")]
    Foot,
    /// US survey feet (1200/3937 m).
    #[value(name = "us_ft")]
    UsSurveyFoot,
}

impl From<Units> for HeightUnit {
    fn from(u: Units) -> Self {
        match u {
            Units::Metre => HeightUnit::Metre,
            Units::Foot => HeightUnit::Foot,
            Units::UsSurveyFoot => HeightUnit::UsSurveyFoot,
        }
    }
}

/// The median of a record's heights, metres; `None` for an empty record. Centres the plausible
/// band when there is no project to give a mean level.
pub fn median_m(heights_m: &[f64]) -> Option<f64> {
    // Readings that are not finite numbers (set aside by QC) do not move the median.
    let mut v: Vec<f64> = heights_m
        .iter()
        .copied()
        .filter(|h| h.is_finite())
        .collect();
    if v.is_empty() {
        return None;
    }
    let mid = v.len() / 2;
    Some(*v.select_nth_unstable_by(mid, f64::total_cmp).1)
}

/// `--naive-time-utc-offset` of a record given on the command line, parsed; the error names
/// the option.
pub fn naive_offset_option(given: Option<&str>) -> anyhow::Result<Option<chrono::FixedOffset>> {
    given
        .map(|o| {
            ebbwise::io::timefmt::parse_offset(o)
                .map_err(|e| anyhow::anyhow!("--naive-time-utc-offset {o}: {e}"))
        })
        .transpose()
}

/// A record given on the command line whose times carry no offset: the reader's advice (a
/// project key) replaced by the option that sets it. `what` names the record(s): "a record",
/// "records".
pub fn naive_time_hint(
    e: impl std::error::Error + Send + Sync + 'static,
    offset_given: bool,
    what: &str,
) -> anyhow::Error {
    let text = e.to_string();
    if !offset_given && text.contains("has no UTC offset") {
        anyhow::anyhow!(
            "{}: for {what} given on the command line, give --naive-time-utc-offset OFFSET (e.g. +01:00)",
            text.replace(" (set naive_time_utc_offset)", "")
        )
    } else {
        anyhow::Error::from(e)
    }
}

/// Where a data output goes: its file through a temporary name, or stdout.
pub fn sink<'a>(out: &'a DataOut, stdout: &'a mut Stdout) -> ebbwise::io::atomic::Sink<'a> {
    match out {
        DataOut::File(p) => ebbwise::io::atomic::Sink::File(p),
        DataOut::Stdout => ebbwise::io::atomic::Sink::Stream(stdout),
    }
}

/// `--format`: the format of a run's per-sounding files.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
pub enum FormatArg {
    /// Comma-separated text.
    Csv,
    /// Apache Parquet (typed columns).
    Parquet,
}

impl FormatArg {
    /// The format the library names.
    pub fn format(self) -> ebbwise::io::project::TableFormat {
        match self {
            FormatArg::Csv => ebbwise::io::project::TableFormat::Csv,
            FormatArg::Parquet => ebbwise::io::project::TableFormat::Parquet,
        }
    }
}
