//! `ebbwise datums`: observed high and low waters and tidal datums of a record or of a project's
//! gauge into a datums file (or stdout with `--out -`); the table on stderr.

use std::io::Write;
use std::path::PathBuf;

use ebbwise::io::gauge_csv::read_gauge_record;
use ebbwise::io::project::{GaugeSpec, Project, QcSpec};
use ebbwise::io::timefmt::utc_label;
use ebbwise::run::datums::{
    datums_of_gauge, harmonic_datums_of, write_harmonic_datums, DatumsOutcome, DatumsRequest,
    HarmonicOutcome,
};
use ebbwise::CAUTION;

use super::common::{
    find_gauge, median_m, naive_offset_option, naive_time_hint, sink, DataOut, Stdout, Units,
};
use super::Outcome;

#[derive(Debug, clap::Args)]
pub struct Args {
    /// The record (CSV with a header); or give --project and --gauge, or --constants alone.
    #[arg(required_unless_present_any = ["project", "constants"], conflicts_with = "project")]
    record: Option<PathBuf>,
    /// Harmonic constants (an `ebbwise analyse` file): LAT and HAT over 18.61 years every
    /// 6 minutes, and Z0, each with u. Alone, they are written to a harmonic-datums file;
    /// with a record, added to its datums file. With --project the gauge's `constants` are used.
    #[arg(long, value_name = "FILE", conflicts_with = "project")]
    constants: Option<PathBuf>,
    /// Also write the observed high and low waters to this CSV file.
    #[arg(long, value_name = "FILE")]
    high_low_waters: Option<PathBuf>,
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
    if let (None, None, Some(c)) = (&a.record, &a.project, &a.constants) {
        if a.high_low_waters.is_some() {
            anyhow::bail!(
                "--high-low-waters needs a record (the high and low waters are observed)"
            );
        }
        let h = harmonic_datums_of(c, a.zero_above_datum_m)?;
        let stem = c
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "constants".into());
        let out = given.unwrap_or_else(|| {
            DataOut::File(PathBuf::from(format!("{stem}.harmonic-datums.toml")))
        });
        let (_, written) = write_harmonic_datums(&h, None, sink(&out, &mut stdout))?;
        drop(stdout);
        let mut w = std::io::stderr().lock();
        let _ = writeln!(
            w,
            "ebbwise datums: from the harmonic constants {}",
            c.display()
        );
        print_harmonic(&mut w, &h);
        let _ = match &written {
            Some(p) => writeln!(w, "wrote {}", p.display()),
            None => writeln!(w, "datums written to stdout"),
        };
        let _ = writeln!(w, "{CAUTION}");
        return Ok(Outcome::Done);
    }
    let o = match (&a.record, &a.project) {
        (Some(record), _) => {
            let harmonic = match &a.constants {
                Some(c) => Some(harmonic_datums_of(c, a.zero_above_datum_m)?),
                None => None,
            };
            let naive = naive_offset_option(a.naive_time_utc_offset.as_deref())?;
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
            let o = datums_of_gauge(
                &spec,
                DatumsRequest {
                    naive_offset: naive,
                    qc: (!a.no_qc).then_some(&qc),
                    gauge_id: None,
                    tied_to_chart_datum: a.zero_above_datum_m.is_some(),
                    harmonic: harmonic.as_ref(),
                    high_low_waters: a.high_low_waters.as_deref(),
                },
                sink(&out, &mut stdout),
            )
            .map_err(|e| naive_time_hint(e, naive.is_some(), "a record"))?;
            (o, harmonic)
        }
        (None, Some(project)) => {
            let p = Project::load(project)?;
            let g = find_gauge(&p, a.gauge.as_deref().unwrap_or_default())?;
            let harmonic = match &g.constants {
                Some(c) => Some(harmonic_datums_of(c, Some(g.zero_above_datum_m))?),
                None => None,
            };
            let out = given.unwrap_or_else(|| {
                DataOut::File(p.spec.output.dir.join(format!("{}.datums.toml", g.id)))
            });
            let o = datums_of_gauge(
                g,
                DatumsRequest {
                    naive_offset: p.gauge_naive_offset(g),
                    qc: (!a.no_qc).then_some(&p.spec.qc),
                    gauge_id: Some(&g.id),
                    tied_to_chart_datum: true,
                    harmonic: harmonic.as_ref(),
                    high_low_waters: a.high_low_waters.as_deref(),
                },
                sink(&out, &mut stdout),
            )?;
            (o, harmonic)
        }
        (None, None) => anyhow::bail!("give a record, or --project and --gauge, or --constants"),
    };
    drop(stdout);
    print_datums(&o.0, o.1.as_ref());
    Ok(Outcome::Done)
}

/// LAT, HAT and Z0 lines and the constants' warnings.
fn print_harmonic(w: &mut impl Write, h: &HarmonicOutcome) {
    let _ = writeln!(
        w,
        "  {:<6} {:>14} {:>14} {:>9}  (harmonic: {} years every {} min from {})",
        "datum",
        "above CD m",
        "above zero m",
        "u m",
        h.datums.years,
        h.datums.step_s / 60.0,
        utc_label(h.datums.start_s)
    );
    for (name, e, at) in [
        ("LAT", &h.lat, h.datums.lat.at_s),
        ("HAT", &h.hat, h.datums.hat.at_s),
        ("Z0", &h.z0, None),
    ] {
        let cd = e
            .above_chart_datum_m
            .map(|v| format!("{v:.4}"))
            .unwrap_or_else(|| "-".into());
        let _ = writeln!(
            w,
            "  {:<6} {:>14} {:>14.4} {:>9.4}{}",
            name,
            cd,
            e.above_gauge_zero_m,
            e.u_m,
            at.map(|t| format!("  at {}", utc_label(t)))
                .unwrap_or_default()
        );
    }
    for x in &h.warnings {
        let _ = writeln!(w, "  warning: {x}");
    }
}

/// The datums, on stderr.
fn print_datums(o: &DatumsOutcome, h: Option<&HarmonicOutcome>) {
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
    for (name, e) in f.levels().into_iter().filter(|(_, e)| e.method.is_none()) {
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
    if let Some(h) = h {
        print_harmonic(&mut w, h);
    }
    if let Some(p) = &o.high_low_waters_written {
        let _ = writeln!(w, "wrote {}", p.display());
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
