//! `ebbwise analyse`: harmonic analysis of a record or of a project's gauge into a constants
//! file (or stdout with `--out -`); the results table on stderr.

use std::io::Write;
use std::path::PathBuf;

use ebbwise::compute::harmonic::{tide_type, AnalysisSettings, NodalMode};
use ebbwise::io::atomic::Sink;
use ebbwise::io::gauge_csv::read_gauge_record;
use ebbwise::io::project::{GaugeSpec, Project, QcSpec};
use ebbwise::io::timefmt::utc_label;
use ebbwise::run::harmonics::{analyse_gauge, AnalyseOutcome};
use ebbwise::CAUTION;

use super::common::{find_gauge, median_m, DataOut, Stdout, Units};
use super::Outcome;

/// Where the nodal corrections f and u are evaluated (`--nodal`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Nodal {
    /// At every sample.
    PerSample,
    /// Once, at the record's central instant (adequate up to about a year).
    Centre,
}

impl From<Nodal> for NodalMode {
    fn from(n: Nodal) -> Self {
        match n {
            Nodal::PerSample => NodalMode::PerSample,
            Nodal::Centre => NodalMode::Centre,
        }
    }
}

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The record (CSV with a header); or give --project and --gauge.
    #[arg(required_unless_present = "project", conflicts_with = "project")]
    record: Option<PathBuf>,
    /// A project file: analyse one of its gauges (levels above chart datum).
    #[arg(long, requires = "gauge")]
    project: Option<PathBuf>,
    /// With --project: the gauge id.
    #[arg(long, value_name = "ID")]
    gauge: Option<String>,
    /// With a record: the time column (ISO 8601 with offset).
    #[arg(long, default_value = "time")]
    time_column: String,
    /// With a record: the height column.
    #[arg(long, default_value = "height")]
    height_column: String,
    /// With a record: units of the heights.
    #[arg(long, value_enum, default_value = "m")]
    units: Units,
    /// With a record: height of the gauge zero above chart datum, metres (levels are then
    /// above chart datum; without it, above the record's zero).
    #[arg(long, allow_hyphen_values = true)]
    zero_above_datum_m: Option<f64>,
    /// Constituents to fit, comma-separated (default: chosen by the Rayleigh criterion).
    #[arg(long, value_delimiter = ',')]
    constituents: Option<Vec<String>>,
    /// Rayleigh factor for the automatic choice.
    #[arg(long, default_value_t = 1.0)]
    rayleigh: f64,
    /// Do not infer unresolved K2, P1, N2, Q1 from S2, K1, M2, O1.
    #[arg(long)]
    no_inference: bool,
    /// Where the nodal corrections are evaluated.
    #[arg(long, value_enum, default_value = "per-sample")]
    nodal: Nodal,
    /// Analyse every sample, without quality control.
    #[arg(long)]
    no_qc: bool,
    /// The constants file to write; `-` writes it to stdout. Default: `<STEM>.constants.toml`
    /// in the current folder, STEM being the record's file name without its extension; with
    /// --project, `<ID>.constants.toml` in the project's output folder.
    #[arg(long, value_name = "FILE")]
    out: Option<PathBuf>,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    if !(a.rayleigh.is_finite() && a.rayleigh > 0.0) {
        anyhow::bail!(
            "--rayleigh: expected a positive number, found {}",
            a.rayleigh
        );
    }
    let settings = AnalysisSettings {
        rayleigh_factor: a.rayleigh,
        constituents: a.constituents.clone(),
        infer: !a.no_inference,
        nodal: a.nodal.into(),
    };
    let given = a.out.clone().map(DataOut::from_option);
    let mut stdout = Stdout::lock();
    let o = match (&a.record, &a.project) {
        (Some(record), _) => {
            let mut spec =
                GaugeSpec::for_record(record, a.units.into(), a.zero_above_datum_m.unwrap_or(0.0));
            spec.time_column = a.time_column.clone();
            spec.height_column = a.height_column.clone();
            // The plausible band for QC is centred on the record's median.
            if let Ok(r) = read_gauge_record(&spec, None) {
                if let Some(m) = median_m(&r.heights_m) {
                    spec.mean_level_above_datum_m = m;
                }
            }
            let out = given.unwrap_or_else(|| {
                DataOut::File(PathBuf::from(format!("{}.constants.toml", spec.id)))
            });
            let levels = if a.zero_above_datum_m.is_some() {
                "above chart datum"
            } else {
                "above the record's zero"
            };
            let qc = QcSpec::default();
            analyse_gauge(
                &spec,
                None,
                (!a.no_qc).then_some(&qc),
                &settings,
                None,
                levels,
                sink(&out, &mut stdout),
            )?
        }
        (None, Some(project)) => {
            let p = Project::load(project)?;
            let g = find_gauge(&p, a.gauge.as_deref().unwrap_or_default())?;
            let out = given.unwrap_or_else(|| {
                DataOut::File(p.spec.output.dir.join(format!("{}.constants.toml", g.id)))
            });
            analyse_gauge(
                g,
                p.gauge_naive_offset(g),
                (!a.no_qc).then_some(&p.spec.qc),
                &settings,
                Some(g.id.clone()),
                "above chart datum",
                sink(&out, &mut stdout),
            )?
        }
        (None, None) => anyhow::bail!("give a record, or --project and --gauge"),
    };
    drop(stdout);
    print_analysis(&o);
    Ok(Outcome::Done)
}

fn sink<'a>(out: &'a DataOut, stdout: &'a mut Stdout) -> Sink<'a> {
    match out {
        DataOut::File(p) => Sink::File(p),
        DataOut::Stdout => Sink::Stream(stdout),
    }
}

/// The analysis, on stderr.
fn print_analysis(o: &AnalyseOutcome) {
    let an = &o.analysis;
    let mut w = std::io::stderr().lock();
    let _ = writeln!(
        w,
        "ebbwise analyse: {} samples from {} to {} ({:.1} days){}; nodal corrections {}",
        an.n_samples,
        utc_label(an.span_s.0),
        utc_label(an.span_s.1),
        (an.span_s.1 - an.span_s.0) / 86400.0,
        if o.set_aside > 0 {
            format!(
                ", {} of {} samples set aside by QC",
                o.set_aside, o.samples_read
            )
        } else {
            String::new()
        },
        an.nodal.as_str()
    );
    let _ = writeln!(
        w,
        "  Z0 {:.4} m ± {:.4} (1σ), levels {}",
        an.z0_m, an.u_z0_m, o.levels
    );
    let _ = writeln!(
        w,
        "  {:<8} {:>12} {:>9} {:>10} {:>8}  {:>10}",
        "name", "speed °/h", "H m", "u(H) m", "G °", "u(G) °"
    );
    let mut shown: Vec<_> = an.fitted.iter().collect();
    shown.sort_by(|x, y| y.amplitude_m.total_cmp(&x.amplitude_m));
    for f in &shown {
        let _ = writeln!(
            w,
            "  {:<8} {:>12.7} {:>9.4} {:>10.4} {:>8.2}  {:>10.2}{}",
            f.constituent.name,
            f.constituent.speed_deg_per_h,
            f.amplitude_m,
            f.u_amplitude_m,
            f.phase_deg,
            f.u_phase_deg,
            f.inferred_from
                .map(|(r, k)| format!("  inferred from {r} (×{k:.4})"))
                .unwrap_or_default()
        );
    }
    let _ = writeln!(
        w,
        "  residual RMS {:.4} m; variance explained {:.2} %; {} constituents fitted, {} inferred, {} {}",
        an.residual_rms_m,
        100.0 * an.variance_explained,
        an.fitted.iter().filter(|f| f.inferred_from.is_none()).count(),
        an.fitted.iter().filter(|f| f.inferred_from.is_some()).count(),
        an.left_out.len(),
        if an.rayleigh_factor.is_some() {
            "candidates left out or inferred by the Rayleigh criterion"
        } else {
            "notes on the given list"
        }
    );
    if an.rayleigh_factor.is_none() {
        for (name, why) in &an.left_out {
            let _ = writeln!(w, "  note: {name} {why}");
        }
    }
    if let Some(ff) = an.form_factor() {
        let missing: Vec<&str> = ["K1", "O1", "M2", "S2"]
            .into_iter()
            .filter(|n| !an.fitted.iter().any(|f| f.constituent.name == *n))
            .collect();
        let _ = writeln!(
            w,
            "  form factor F = (K1 + O1)/(M2 + S2) = {ff:.3}: {}{}",
            tide_type(ff),
            if missing.is_empty() {
                String::new()
            } else {
                format!(
                    " (without {}: not resolved by this record)",
                    missing.join(", ")
                )
            }
        );
    }
    let days = (an.span_s.1 - an.span_s.0) / 86400.0;
    if days < 28.0 {
        let _ = writeln!(
            w,
            "  note: a {days:.1}-day record separates few constituents; constants from less than four weeks suit short-term prediction only"
        );
    }
    match &o.written {
        Some(p) => {
            let _ = writeln!(w, "wrote {}", p.display());
        }
        None => {
            let _ = writeln!(w, "constants written to stdout");
        }
    }
    let _ = writeln!(w, "{CAUTION}");
}
