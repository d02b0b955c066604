//! `ebbwise datums`: observed high and low waters and tidal datums of a record or of a project's
//! gauge into a datums file (or stdout with `--out -`); the table on stderr.

use std::io::Write;
use std::path::PathBuf;

use ebbwise::io::atomic::Sink;
use ebbwise::io::gauge_csv::read_gauge_record;
use ebbwise::io::project::{GaugeSpec, Project, QcSpec};
use ebbwise::io::timefmt::{parse_offset, utc_label};
use ebbwise::run::datums::{datums_of_gauge, DatumsOutcome, DatumsRequest};
use ebbwise::CAUTION;

use super::common::{find_gauge, median_m, DataOut, Stdout, Units};
use super::Outcome;

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The record (CSV with a header); or give --project and --gauge.
    #[arg(required_unless_present = "project", conflicts_with = "project")]
    record: Option<PathBuf>,
    /// A project file: the datums of one of its gauges.
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
    /// With a record: the UTC offset of times written without one, e.g. +01:00, -03:30, Z (as
    /// a project's naive_time_utc_offset); without it such a time is an error.
    #[arg(long, value_name = "OFFSET", allow_hyphen_values = true)]
    naive_time_utc_offset: Option<String>,
    /// With a record: units of the heights.
    #[arg(long, value_enum, default_value = "m")]
    units: Units,
    /// With a record: height of the gauge zero above chart datum, metres (the datums are then
    /// given above chart datum too; without it, above the gauge zero only).
    #[arg(long, allow_hyphen_values = true)]
    zero_above_datum_m: Option<f64>,
    /// Tabulate every sample, without quality control.
    #[arg(long)]
    no_qc: bool,
    /// The datums file to write; `-` writes it to stdout. Default: `<STEM>.datums.toml` in the
    /// current folder, STEM being the record's file name without its extension; with
    /// --project, `<ID>.datums.toml` in the project's output folder.
    #[arg(long, value_name = "FILE")]
    out: Option<PathBuf>,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    let given = a.out.clone().map(DataOut::from_option);
    let mut stdout = Stdout::lock();
    let o = match (&a.record, &a.project) {
        (Some(record), _) => {
            let naive = match &a.naive_time_utc_offset {
                Some(o) => Some(
                    parse_offset(o)
                        .map_err(|e| anyhow::anyhow!("--naive-time-utc-offset {o}: {e}"))?,
                ),
                None => None,
            };
            let mut spec =
                GaugeSpec::for_record(record, a.units.into(), a.zero_above_datum_m.unwrap_or(0.0));
            spec.time_column = a.time_column.clone();
            spec.height_column = a.height_column.clone();
            // The plausible band for QC is centred on the record's median.
            if let Ok(r) = read_gauge_record(&spec, naive) {
                if let Some(m) = median_m(&r.heights_m) {
                    spec.mean_level_above_datum_m = m;
                }
            }
            let out = given.unwrap_or_else(|| {
                DataOut::File(PathBuf::from(format!("{}.datums.toml", spec.id)))
            });
            let qc = QcSpec::default();
            datums_of_gauge(
                &spec,
                DatumsRequest {
                    naive_offset: naive,
                    qc: (!a.no_qc).then_some(&qc),
                    gauge_id: None,
                    tied_to_chart_datum: a.zero_above_datum_m.is_some(),
                },
                sink(&out, &mut stdout),
            )
            .map_err(|e| {
                let text = e.to_string();
                if naive.is_none() && text.contains("has no UTC offset") {
                    anyhow::anyhow!(
                        "{}: for a record given on the command line, give --naive-time-utc-offset OFFSET (e.g. +01:00)",
                        text.replace(" (set naive_time_utc_offset)", "")
                    )
                } else {
                    anyhow::Error::from(e)
                }
            })?
        }
        (None, Some(project)) => {
            let p = Project::load(project)?;
            let g = find_gauge(&p, a.gauge.as_deref().unwrap_or_default())?;
            let out = given.unwrap_or_else(|| {
                DataOut::File(p.spec.output.dir.join(format!("{}.datums.toml", g.id)))
            });
            datums_of_gauge(
                g,
                DatumsRequest {
                    naive_offset: p.gauge_naive_offset(g),
                    qc: (!a.no_qc).then_some(&p.spec.qc),
                    gauge_id: Some(&g.id),
                    tied_to_chart_datum: true,
                },
                sink(&out, &mut stdout),
            )?
        }
        (None, None) => anyhow::bail!("give a record, or --project and --gauge"),
    };
    drop(stdout);
    print_datums(&o);
    Ok(Outcome::Done)
}

fn sink<'a>(out: &'a DataOut, stdout: &'a mut Stdout) -> Sink<'a> {
    match out {
        DataOut::File(p) => Sink::File(p),
        DataOut::Stdout => Sink::Stream(stdout),
    }
}

/// The datums, on stderr.
fn print_datums(o: &DatumsOutcome) {
    let f = &o.file;
    let d = &o.datums;
    let mut w = std::io::stderr().lock();
    let _ = writeln!(
        w,
        "ebbwise datums: {} samples from {} to {}{}",
        o.tabulation.samples,
        utc_label(o.tabulation.span_s.0),
        utc_label(o.tabulation.span_s.1),
        if o.set_aside > 0 {
            format!(
                ", {} of {} samples set aside by QC",
                o.set_aside, o.samples_read
            )
        } else {
            String::new()
        }
    );
    let _ = writeln!(
        w,
        "  {} complete tidal days from {} to {} ({} incomplete left out); {} high and {} low waters{}",
        d.complete_days,
        utc_label(d.span_s.0),
        utc_label(d.span_s.1),
        d.incomplete_days,
        d.high_waters,
        d.low_waters,
        if d.doubles > 0 {
            format!(", {} of them double (kept as one)", d.doubles)
        } else {
            String::new()
        }
    );
    let _ = writeln!(
        w,
        "  noise {:.4} m; a turning point stands {:.4} m above its neighbours, {:.2} h apart",
        f.noise_m, f.threshold_m, f.min_separation_h
    );
    let _ = writeln!(
        w,
        "  {:<6} {:>14} {:>14} {:>9}",
        "datum", "above CD m", "above zero m", "u m"
    );
    for (name, e) in f.levels() {
        let cd = e
            .above_chart_datum_m
            .map(|v| format!("{v:.4}"))
            .unwrap_or_else(|| "-".into());
        let _ = writeln!(
            w,
            "  {:<6} {:>14} {:>14.4} {:>9.4}",
            name, cd, e.above_gauge_zero_m, e.u_m
        );
    }
    for (name, e) in [("MN", &f.mn), ("GT", &f.gt)] {
        let _ = writeln!(
            w,
            "  {:<6} {:>14} {:>14} {:>9.4}  (range {:.4} m)",
            name, "", "", e.u_m, e.range_m
        );
    }
    if f.zero_above_datum_m.is_none() {
        let _ = writeln!(
            w,
            "  note: the record's zero is not tied to chart datum (give --zero-above-datum-m): levels above the gauge zero only"
        );
    }
    let _ = writeln!(
        w,
        "  note: u is relative to a long record of the same tide; the 18.61-year nodal cycle, seasonal changes and the gauge zero's own error are not in it (docs/datums.md)"
    );
    if (d.span_s.1 - d.span_s.0) / 86_400.0 < ebbwise::compute::datums::SPRING_NEAP_DAYS {
        let _ = writeln!(
            w,
            "  warning: the complete days span less than a spring-neap cycle (14.77 days): the datums follow the part of the cycle recorded, and u is a lower bound"
        );
    }
    match &o.written {
        Some(p) => {
            let _ = writeln!(w, "wrote {}", p.display());
        }
        None => {
            let _ = writeln!(w, "datums written to stdout");
        }
    }
    let _ = writeln!(w, "{CAUTION}");
}
