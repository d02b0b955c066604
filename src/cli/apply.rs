//! `ebbwise apply`: reduces soundings with tide read from a correction file.

use std::path::PathBuf;

use ebbwise::io::atomic::write_atomic;
use ebbwise::run::correctors::{apply_corrections, provenance_mismatches};

use super::common::{load_or_report, out_folder};
use super::reduce::print_run_summary;
use super::Outcome;

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The correction file (per zone, per line or per sounding).
    corrections: PathBuf,
    /// Soundings files to reduce (default: all of the project's); each must belong to a
    /// `[[soundings]]` group of the project, which gives its layout.
    soundings: Vec<PathBuf>,
    /// The project file: soundings layouts and zoning.
    #[arg(long)]
    project: PathBuf,
    /// Output folder (default: the project's `[output] dir`).
    #[arg(long, value_name = "DIR")]
    out: Option<PathBuf>,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    let out = out_folder(a.out)?;
    let loaded = load_or_report(&a.project)?;
    let out_dir = out.unwrap_or_else(|| loaded.project.spec.output.dir.clone());
    let summary = apply_corrections(&loaded, &a.corrections, a.soundings, out_dir.clone())?;
    let summary_path = out_dir.join("apply-summary.json");
    write_atomic(&summary_path, &serde_json::to_vec_pretty(&summary)?)?;
    for w in provenance_mismatches(&loaded, &a.corrections) {
        eprintln!("warning: {w}");
    }
    print_run_summary(
        "apply",
        &format!(
            "{} (tide from {})",
            loaded.project.spec.name,
            a.corrections.display()
        ),
        &summary,
        &summary_path,
        None,
    );
    Ok(Outcome::of_reduction(&summary))
}
