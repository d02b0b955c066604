//! The `ebbwise` command line: the top-level parser and the mapping of a command's outcome to
//! the exit status (0 ok, 1 some soundings not reduced or checks failed, 2 could not run).
//!
//! Each command has its own file: its options (`Args`, only what the user typed, validated by
//! clap) and `run`, which builds the run configuration, calls the library and prints the human
//! summary. Output convention, for every command: the human summary goes to stderr; data goes to
//! stdout only when the user gives `-` as the path of a single data file (`check --json -`,
//! `analyse --out -`, `datums --out -`, `transfer --out -`, `predict --out -` or
//! `--high-low-waters -`). Helpers shared by several commands are in `common`; the progress bar
//! of a reduction is in `progress`.

mod analyse;
mod apply;
mod check;
mod common;
mod correctors;
mod datums;
mod demo;
mod predict;
mod progress;
mod qc;
mod reduce;
mod transfer;
mod zones;

use clap::{Parser, Subcommand};

use ebbwise::compute::reduce::SoundingStatus;
use ebbwise::run::reduce::RunSummary;
use ebbwise::{EXIT_CANNOT_RUN, EXIT_INCOMPLETE, EXIT_OK};

/// Reduce hydrographic soundings to chart datum with tidal zoning.
#[derive(Debug, Parser)]
#[command(
    name = "ebbwise",
    version,
    about,
    long_about = None,
    disable_help_subcommand = true
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Reduce every sounding of a project to chart datum.
    Reduce(reduce::Args),
    /// Read everything a reduction would and report problems, without reducing.
    Check(check::Args),
    /// Write tide-correction files (per zone on a regular step; per survey line with
    /// --per-line; per sounding with --per-sounding), each with a JSON provenance sidecar.
    Correctors(correctors::Args),
    /// Reduce soundings with tide from a correction file written by `ebbwise correctors`.
    Apply(apply::Args),
    /// Quality control of gauge records: flags per sample with reasons, a plot per gauge, and
    /// gauge-to-gauge comparison through the zoning's correctors.
    Qc(qc::Args),
    /// Harmonic analysis of a gauge record: Z0, amplitude and Greenwich phase lag of each
    /// constituent, written to a constants file (TOML).
    #[command(visible_alias = "analyze")]
    Analyse(analyse::Args),
    /// Predict the tide from a constants file on a regular grid, with high and low waters.
    Predict(predict::Args),
    /// Observed high and low waters and tidal datums (MSL, MHW, MLW, MHHW, MLLW, MTL, DTL, MN,
    /// GT) of a gauge record, each with its uncertainty, written to a datums file (TOML).
    Datums(datums::Args),
    /// Co-tidal fields from the gauges' harmonic constants: each zone's derived time corrector
    /// and range ratio (`derive`), and the zoning against them (`compare`).
    #[command(subcommand_required = true)]
    Zones(zones::Args),
    /// A short-term gauge's datums and its zero above chart datum by simultaneous comparison
    /// with a control gauge of known long-term datums (range-ratio and direct methods), written
    /// to a transfer file (TOML).
    Transfer(transfer::Args),
    /// Reduce the demo survey (./zoning-demo, or --dir) and say where the results are.
    Demo(demo::Args),
    /// Print the help of ebbwise, or of one of its commands.
    Help {
        /// The command whose help to print (default: ebbwise's own).
        command: Option<String>,
    },
}

/// How a command that ran ended. A command that could not run returns an error instead.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything worked: every sounding reduced, no check failed, nothing flagged.
    Done,
    /// The run completed, but some soundings were not reduced, a check found errors or quality
    /// control flagged something.
    Incomplete,
}

impl Outcome {
    /// `Done` when every row of a reduction was reduced (gap-filled rows included: they have a
    /// tide), else `Incomplete`.
    pub fn of_reduction(summary: &RunSummary) -> Self {
        if summary.count(SoundingStatus::Reduced) + summary.count(SoundingStatus::GapFilled)
            == summary.rows()
        {
            Outcome::Done
        } else {
            Outcome::Incomplete
        }
    }

    /// `Incomplete` when `failed`, else `Done`.
    pub fn unless(failed: bool) -> Self {
        if failed {
            Outcome::Incomplete
        } else {
            Outcome::Done
        }
    }
}

/// A failure whose explanation is already on stderr (findings, say): exit 2 without a message.
#[derive(Debug)]
pub struct Reported;

impl std::fmt::Display for Reported {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("the reasons are printed above")
    }
}

impl std::error::Error for Reported {}

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
    let result = match cli.command {
        Command::Reduce(a) => reduce::run(a),
        Command::Check(a) => check::run(a),
        Command::Correctors(a) => correctors::run(a),
        Command::Apply(a) => apply::run(a),
        Command::Qc(a) => qc::run(a),
        Command::Analyse(a) => analyse::run(a),
        Command::Zones(a) => zones::run(a),
        Command::Predict(a) => predict::run(a),
        Command::Datums(a) => datums::run(a),
        Command::Transfer(a) => transfer::run(a),
        Command::Demo(a) => demo::run(a),
        Command::Help { command } => help(command.as_deref()),
    };
    match result {
        Ok(Outcome::Done) => EXIT_OK,
        Ok(Outcome::Incomplete) => EXIT_INCOMPLETE,
        Err(e) => {
            if e.downcast_ref::<Reported>().is_none() {
                eprintln!("ebbwise: {e:#}");
            }
            EXIT_CANNOT_RUN
        }
    }
}

/// `ebbwise help [COMMAND]`: exactly what `ebbwise [COMMAND] --help` prints, on stdout.
fn help(command: Option<&str>) -> anyhow::Result<Outcome> {
    let mut argv = vec!["ebbwise"];
    argv.extend(command);
    argv.push("--help");
    match Cli::try_parse_from(&argv) {
        Err(e) if !e.use_stderr() => {
            let _ = e.print();
            Ok(Outcome::Done)
        }
        // An unknown command: clap's own message, with suggestions.
        Err(e) => {
            let _ = e.print();
            Err(Reported.into())
        }
        Ok(_) => anyhow::bail!("help: '{}' is not a command", command.unwrap_or_default()),
    }
}
