//! `ebbwise transfer`: a short-term gauge's datums and datum relation by comparison with a
//! control gauge, into a datum-transfer file (or stdout with `--out -`); the table on stderr.

use std::io::Write;
use std::path::PathBuf;

use ebbwise::compute::transfer::{Method, SubordinateDatums, Transferred};
use ebbwise::io::gauge_csv::read_gauge_record;
use ebbwise::io::project::{GaugeSpec, Project, QcSpec};
use ebbwise::io::timefmt::utc_label;
use ebbwise::run::transfer::{
    reason_words, transfer_datum, GaugeInput, TransferOutcome, TransferRequest, DEFAULT_MIN_DAYS,
};
use ebbwise::CAUTION;

use super::common::{
    find_gauge, median_m, naive_offset_option, naive_time_hint, sink, DataOut, Stdout, Units,
};
use super::Outcome;

/// `--method`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum MethodArg {
    /// Modified range ratio.
    Mrr,
    /// Direct level transfer.
    Direct,
}

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The short-term gauge's record (CSV with a header); or give --project, --gauge and
    /// --control.
    #[arg(
        required_unless_present = "project",
        conflicts_with = "project",
        requires = "control_record"
    )]
    record: Option<PathBuf>,
    /// The control gauge's record, over (at least) the same period as the short-term record.
    #[arg(long, value_name = "FILE", conflicts_with = "project")]
    control_record: Option<PathBuf>,
    /// A project file: the short-term gauge (--gauge) and the control (--control) are two of its
    /// gauges.
    #[arg(long, requires_all = ["gauge", "control"])]
    project: Option<PathBuf>,
    /// With --project: the short-term gauge's id.
    #[arg(long, value_name = "ID")]
    gauge: Option<String>,
    /// With --project: the control gauge's id.
    #[arg(long, value_name = "ID")]
    control: Option<String>,
    /// The control's long-term datums (a datums file written by `ebbwise datums`, tied to chart
    /// datum). With --project, default: the control gauge's `datums`.
    #[arg(long, value_name = "FILE")]
    control_datums: Option<PathBuf>,
    /// Standard uncertainty of chart datum at the control, metres. Default: with --project, the
    /// control gauge's u_datum_m (or the project's default_u_datum_m); with records, 0.
    #[arg(long, value_name = "M")]
    control_u_datum_m: Option<f64>,
    /// The method: mrr (modified range ratio) or direct (direct level transfer). Default: by
    /// tide type, mrr for a semidiurnal or mixed tide, direct for a diurnal tide or small ranges.
    #[arg(long, value_enum)]
    method: Option<MethodArg>,
    /// Fewest paired complete tidal days accepted (at least 3).
    #[arg(long, value_name = "N", default_value_t = DEFAULT_MIN_DAYS)]
    min_days: usize,
    /// With records: the time column of both (ISO 8601 with offset).
    #[arg(long, default_value = "time")]
    time_column: String,
    /// With records: the height column of the short-term record.
    #[arg(long, default_value = "height")]
    height_column: String,
    /// With records: the height column of the control record.
    #[arg(long, default_value = "height")]
    control_height_column: String,
    /// With records: the UTC offset of times written without one, e.g. +01:00 or Z; without it
    /// such a time is an error.
    #[arg(long, value_name = "OFFSET", allow_hyphen_values = true)]
    naive_time_utc_offset: Option<String>,
    /// With records: units of the short-term record's heights.
    #[arg(long, value_enum, default_value = "m")]
    units: Units,
    /// With records: units of the control record's heights.
    #[arg(long, value_enum, default_value = "m")]
    control_units: Units,
    /// Compare every sample, without quality control.
    #[arg(long)]
    no_qc: bool,
    /// The transfer file to write; `-` writes it to stdout. Default: `<STEM>.transfer.toml` in
    /// the current folder, STEM being the short-term record's file name without its extension;
    /// with --project, `<ID>.transfer.toml` in the project's output folder.
    #[arg(long, value_name = "FILE")]
    out: Option<PathBuf>,
}

fn record_spec(
    path: &std::path::Path,
    units: Units,
    column: &str,
    a: &Args,
    naive: Option<chrono::FixedOffset>,
) -> GaugeSpec {
    let mut spec = GaugeSpec::for_record(path, units.into(), 0.0);
    spec.time_column = a.time_column.clone();
    spec.height_column = column.to_string();
    // The plausible band for QC is centred on the record's median.
    if let Ok(r) = read_gauge_record(&spec, naive) {
        if let Some(m) = median_m(&r.heights_m) {
            spec.mean_level_above_datum_m = m;
        }
    }
    spec
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    if let Some(u) = a.control_u_datum_m {
        anyhow::ensure!(
            u.is_finite() && u >= 0.0,
            "--control-u-datum-m: expected a standard uncertainty of 0 or more metres, found {u}"
        );
    }
    anyhow::ensure!(
        a.min_days >= ebbwise::compute::transfer::MIN_DAYS,
        "--min-days: expected at least {} tidal days, found {}",
        ebbwise::compute::transfer::MIN_DAYS,
        a.min_days
    );
    let method = a.method.map(|m| match m {
        MethodArg::Mrr => Method::ModifiedRangeRatio,
        MethodArg::Direct => Method::DirectLevel,
    });
    let given = a.out.clone().map(DataOut::from_option);
    let mut stdout = Stdout::lock();
    let o = match (&a.record, &a.project) {
        (Some(record), _) => {
            let control_record = a
                .control_record
                .as_ref()
                .ok_or_else(|| anyhow::anyhow!("give --control-record with a record"))?;
            let control_datums = a.control_datums.as_ref().ok_or_else(|| {
                anyhow::anyhow!("give --control-datums FILE (the control's datums file)")
            })?;
            let naive = naive_offset_option(a.naive_time_utc_offset.as_deref())?;
            let sub = record_spec(record, a.units, &a.height_column, &a, naive);
            let ctl = record_spec(
                control_record,
                a.control_units,
                &a.control_height_column,
                &a,
                naive,
            );
            let out = given.unwrap_or_else(|| {
                DataOut::File(PathBuf::from(format!("{}.transfer.toml", sub.id)))
            });
            let qc = QcSpec::default();
            transfer_datum(
                TransferRequest {
                    subordinate: GaugeInput {
                        spec: &sub,
                        naive_offset: naive,
                        id: &sub.id,
                    },
                    control: GaugeInput {
                        spec: &ctl,
                        naive_offset: naive,
                        id: &ctl.id,
                    },
                    control_datums,
                    u_control_datum_m: a.control_u_datum_m.unwrap_or(0.0),
                    control_zero_in_project_m: None,
                    qc: (!a.no_qc).then_some(&qc),
                    method,
                    min_days: a.min_days,
                    project: None,
                },
                sink(&out, &mut stdout),
            )
            .map_err(|e| naive_time_hint(e, naive.is_some(), "records"))?
        }
        (None, Some(project)) => {
            let p = Project::load(project)?;
            let g = find_gauge(&p, a.gauge.as_deref().unwrap_or_default())?;
            let c = find_gauge(&p, a.control.as_deref().unwrap_or_default())?;
            anyhow::ensure!(
                g.id != c.id,
                "--gauge and --control name the same gauge '{}'",
                g.id
            );
            let control_datums = a
                .control_datums
                .clone()
                .or_else(|| c.datums.clone())
                .ok_or_else(|| {
                    anyhow::anyhow!(
                        "give --control-datums FILE: the control gauge '{}' names no datums file in {}",
                        c.id,
                        project.display()
                    )
                })?;
            let u_cd = a.control_u_datum_m.unwrap_or_else(|| {
                c.u_datum_m
                    .or(p.spec.uncertainty.as_ref().map(|u| u.default_u_datum_m))
                    .unwrap_or(0.0)
            });
            let out = given.unwrap_or_else(|| {
                DataOut::File(p.spec.output.dir.join(format!("{}.transfer.toml", g.id)))
            });
            transfer_datum(
                TransferRequest {
                    subordinate: GaugeInput {
                        spec: g,
                        naive_offset: p.gauge_naive_offset(g),
                        id: &g.id,
                    },
                    control: GaugeInput {
                        spec: c,
                        naive_offset: p.gauge_naive_offset(c),
                        id: &c.id,
                    },
                    control_datums: &control_datums,
                    u_control_datum_m: u_cd,
                    control_zero_in_project_m: Some(c.zero_above_datum_m),
                    qc: (!a.no_qc).then_some(&p.spec.qc),
                    method,
                    min_days: a.min_days,
                    project: Some(project),
                },
                sink(&out, &mut stdout),
            )?
        }
        (None, None) => {
            anyhow::bail!("give a record and --control-record, or --project, --gauge and --control")
        }
    };
    drop(stdout);
    print_transfer(&o);
    Ok(Outcome::Done)
}

fn rows(d: &SubordinateDatums) -> [(&'static str, Transferred); 11] {
    [
        ("MHW", d.mhw),
        ("MLW", d.mlw),
        ("MHHW", d.mhhw),
        ("MLLW", d.mllw),
        ("MTL", d.mtl),
        ("DTL", d.dtl),
        ("MSL", d.msl),
        ("MN", d.mn),
        ("GT", d.gt),
        ("CD", d.chart_datum),
        ("zero/CD", d.zero_above_chart_datum),
    ]
}

/// The comparison and both transfers, on stderr.
fn print_transfer(o: &TransferOutcome) {
    let f = &o.file;
    let c = &o.comparison;
    let mut w = std::io::stderr().lock();
    let _ = writeln!(
        w,
        "ebbwise transfer: {} against the control {}, common period {} to {}",
        f.subordinate,
        f.control,
        utc_label(o.common_s.0),
        utc_label(o.common_s.1)
    );
    for (who, (read, aside)) in [(&f.subordinate, o.samples[0]), (&f.control, o.samples[1])] {
        if aside > 0 {
            let _ = writeln!(w, "  {who}: {aside} of {read} samples set aside by QC");
        }
    }
    let _ = writeln!(
        w,
        "  {} paired complete tidal days from {} to {}; {}'s tide {:.1} min after the control's",
        c.days,
        f.days_start_utc,
        f.days_end_utc,
        f.subordinate,
        o.time_difference_s / 60.0
    );
    let _ = writeln!(
        w,
        "  control datums {} ({} complete days from {} to {}); chart datum {:.4} m on the control's zero (its zero_above_datum_m = {}), u {:.4} m",
        f.inputs.control_datums,
        o.control_datums.complete_days,
        o.control_datums.days_start_utc,
        o.control_datums.days_end_utc,
        -f.control_zero_above_datum_m,
        f.control_zero_above_datum_m,
        f.u_control_datum_m
    );
    if f.u_control_datum_m == 0.0 {
        let _ = writeln!(
            w,
            "  note: chart datum at the control is taken as exact (give --control-u-datum-m for its uncertainty)"
        );
    }
    let _ = writeln!(
        w,
        "  range ratios over the common period: MN {:.5} ± {:.5}, GT {:.5} ± {:.5}",
        f.period.ratios.mn_ratio,
        f.period.ratios.u_mn_ratio,
        f.period.ratios.gt_ratio,
        f.period.ratios.u_gt_ratio
    );
    let _ = writeln!(
        w,
        "  on {}'s zero, metres (MN, GT: ranges; CD: chart datum; zero/CD: the zero above chart datum)",
        f.subordinate
    );
    let _ = writeln!(
        w,
        "  {:<8} {:>11} {:>8} {:>11} {:>8} {:>11}",
        "datum", "range ratio", "u", "direct", "u", "difference"
    );
    for ((name, a), (_, b)) in rows(&o.range_ratio).iter().zip(rows(&o.direct).iter()) {
        let _ = writeln!(
            w,
            "  {:<8} {:>11.4} {:>8.4} {:>11.4} {:>8.4} {:>11.4}",
            name,
            a.value_m,
            a.u_m,
            b.value_m,
            b.u_m,
            a.value_m - b.value_m
        );
    }
    if o.forced {
        let name = match o.method {
            Method::ModifiedRangeRatio => "modified range ratio",
            Method::DirectLevel => "direct level transfer",
        };
        let _ = writeln!(
            w,
            "  method: {name} (--method; the {})",
            reason_words(&o.default.1)
        );
    } else {
        let _ = writeln!(
            w,
            "  method: {}; --method mrr|direct to force",
            reason_words(&o.default.1)
        );
    }
    let _ = writeln!(
        w,
        "  to paste into the project's [[gauge]] table of {} (u_datum_m is the project's name for u_zero_above_datum_m):",
        f.subordinate
    );
    let _ = writeln!(w, "    zero_above_datum_m = {}", f.zero_above_datum_m);
    let _ = writeln!(w, "    u_datum_m = {}", f.u_zero_above_datum_m);
    let _ = writeln!(
        w,
        "  note: u reflects the common period's length and the two places' day-to-day differences; a departure of the period from the long term that both places do not share, and the stability of the short-term gauge's zero, are not in it (docs/datums-computation.md)"
    );
    match &o.written {
        Some(p) => {
            let _ = writeln!(w, "wrote {}", p.display());
        }
        None => {
            let _ = writeln!(w, "transfer written to stdout");
        }
    }
    let _ = writeln!(w, "{CAUTION}");
}
