//! `ebbwise check`: reads everything a reduction would and reports the findings, without
//! reducing. Optionally the findings as JSON, to a file or to stdout (`--json -`).

use std::path::PathBuf;

use ebbwise::io::atomic::AtomicFile;
use ebbwise::run::check::check_project;

use super::common::{print_findings, write_stdout, DataOut};
use super::Outcome;

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The project file (TOML).
    project: PathBuf,
    /// Also write the findings as JSON to this file; `-` writes them to stdout.
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    let report = check_project(&a.project);
    print_findings(&report.findings);
    let span = report
        .sounding_span
        .as_ref()
        .map(|(first, last)| format!(", {first} to {last}"))
        .unwrap_or_default();
    eprintln!(
        "ebbwise check: {} error(s), {} warning(s); {} sounding rows read{span}",
        report.errors(),
        report.warnings(),
        report.sounding_rows
    );
    if let Some(target) = a.json.map(DataOut::from_option) {
        let mut json = serde_json::to_vec_pretty(&report)?;
        json.push(b'\n');
        match target {
            DataOut::Stdout => write_stdout(&json)?,
            DataOut::File(path) => {
                let mut f = AtomicFile::create(&path, &[a.project.as_path()])?;
                f.write_all(&json)?;
                eprintln!("  wrote {}", f.commit()?.display());
            }
        }
    }
    Ok(Outcome::unless(report.errors() > 0))
}
