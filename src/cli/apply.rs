//! `ebbwise apply`: reduces soundings with tide read from a correction file.

use std::path::PathBuf;

use ebbwise::io::atomic::write_atomic;
use ebbwise::run::correctors::apply_corrections;
use ebbwise::run::load::load;

use super::common::{load_project_or_report, out_folder, print_findings, FormatArg};
use super::reduce::{print_run_summary, write_qa_report};
use super::{Outcome, Reported};

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
    /// Survey order to judge against (overrides the project's `[uncertainty] order`):
    /// exclusive, special, 1a, 1b, 2 or a custom order's name. Refuses a correction file
    /// without uncertainty.
    #[arg(long)]
    order: Option<String>,
    /// Do not carry uncertainty (no uncertainty columns, no QA report) even when the project
    /// has an `[uncertainty]` section and the file carries `u_tide_m`.
    #[arg(long)]
    no_uncertainty: bool,
    /// Apply the file even though the project has changed since it was made in inputs that
    /// change a tide or its uncertainty; the differences are written into apply-summary.json.
    #[arg(long)]
    accept_changed_inputs: bool,
    /// Format of the applied files (overrides the project's `[output] format`).
    #[arg(long, value_enum)]
    format: Option<FormatArg>,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    let out = out_folder(a.out)?;
    let mut project = load_project_or_report(&a.project, "apply")?;
    if let Some(f) = a.format {
        project.spec.output.format = f.format();
    }
    let mut loaded = match load(project, a.order.as_deref()) {
        Ok(l) => l,
        Err(findings) => {
            print_findings(&findings);
            eprintln!(
                "ebbwise: cannot apply: fix the errors above (`ebbwise check` lists every problem)"
            );
            return Err(Reported.into());
        }
    };
    if a.no_uncertainty {
        loaded.uncertainty = None;
    } else if a.order.is_some() && loaded.uncertainty.is_none() {
        anyhow::bail!(
            "--order needs an [uncertainty] section in the project (see docs/project-file.md)"
        );
    }
    let out_dir = out.unwrap_or_else(|| loaded.project.spec.output.dir.clone());
    let summary = apply_corrections(
        &mut loaded,
        &a.corrections,
        a.soundings,
        out_dir.clone(),
        a.order.is_some(),
        a.accept_changed_inputs,
    )?;
    let summary_path = out_dir.join("apply-summary.json");
    write_atomic(&summary_path, &serde_json::to_vec_pretty(&summary)?)?;
    for w in &summary.warnings {
        eprintln!("warning: {w}");
    }
    let verdict = write_qa_report(&loaded, &summary, &out_dir)?;
    print_run_summary(
        "apply",
        &format!(
            "{} (tide from {})",
            loaded.project.spec.name,
            a.corrections.display()
        ),
        &summary,
        &summary_path,
        Some(&verdict),
    );
    Ok(Outcome::of_reduction(&summary))
}
