//! `ebbwise demo`: reduces the demo survey exactly as `ebbwise reduce` would, and says where
//! the results are. The folder is `--dir`, else `./zoning-demo` in the current folder; no path
//! known when the program was built is ever used.

use std::path::PathBuf;

use super::reduce::reduce_and_report;
use super::Outcome;

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The demo folder, holding the demo's `project.toml` (default: ./zoning-demo).
    #[arg(long, value_name = "DIR")]
    dir: Option<PathBuf>,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    let given = a.dir.is_some();
    let dir = a.dir.unwrap_or_else(|| PathBuf::from("zoning-demo"));
    let project = dir.join("project.toml");
    if !project.is_file() {
        let looked = std::path::absolute(&project).unwrap_or_else(|_| project.clone());
        anyhow::bail!(
            "demo: no demo project at {}{}; run from the folder that holds zoning-demo/ (the source tree's top folder), or give the demo folder with --dir DIR",
            looked.display(),
            if given { "" } else { " (the default, ./zoning-demo/project.toml)" }
        );
    }
    let (summary, out_dir) = reduce_and_report(&project, None, true, None, false, None)?;
    let outcome = Outcome::of_reduction(&summary);
    eprintln!(
        "Demo survey reduced. Results in {}/{}",
        out_dir.display(),
        if outcome == Outcome::Incomplete {
            " (exit status 1, as from `ebbwise reduce`: some soundings are not reduced, as the demo's planted faults intend)"
        } else {
            ""
        }
    );
    Ok(outcome)
}
