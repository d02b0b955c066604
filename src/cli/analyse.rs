//! `ebbwise analyse`: harmonic analysis of a record or of a project's gauge into a constants
//! file (or stdout with `--out -`); the results table on stderr.

use std::io::Write;
use std::path::PathBuf;

use ebbwise::compute::harmonic::{
    tide_type, AnalysisSettings, InferenceBasis, InferenceRule, NodalMode, U_PHASE_UNIFORM_DEG,
};
use ebbwise::io::gauge_csv::read_gauge_record;
use ebbwise::io::project::{GaugeSpec, Project, QcSpec};
use ebbwise::io::timefmt::utc_label;
use ebbwise::run::harmonics::{
    analyse_gauge, inference_rules_from, AnalyseOutcome, AnalyseRequest,
};
use ebbwise::CAUTION;

use super::common::{
    find_gauge, median_m, naive_offset_option, naive_time_hint, sink, DataOut, Stdout, Units,
};
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
    /// With a record: the UTC offset of times written without one, e.g. +01:00, -03:30, Z (as
    /// a project's naive_time_utc_offset); without it such a time is an error.
    #[arg(long, value_name = "OFFSET", allow_hyphen_values = true)]
    naive_time_utc_offset: Option<String>,
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
    #[arg(long, conflicts_with_all = ["infer", "infer_from"])]
    no_inference: bool,
    /// An inference relation instead of the equilibrium one, repeatable:
    /// INFERRED=REFERENCE:RATIO:PHASE_DIFF_DEG[:U_RATIO:U_PHASE_DEG], e.g. K2=S2:0.27:+3.0
    /// (amplitude ratio inferred/reference, Greenwich lag difference inferred − reference;
    /// default uncertainties 10 % of the ratio and 5°).
    #[arg(long, value_name = "SPEC")]
    infer: Vec<String>,
    /// Take the K2/S2, P1/K1, N2/M2 and Q1/O1 relations from a reference station's constants
    /// file (both of a pair fitted there), with uncertainties from its u(H) and u(G); --infer
    /// overrides a pair.
    #[arg(long, value_name = "FILE")]
    infer_from: Option<PathBuf>,
    /// Analyse a record shorter than 25.8 h (360° over the M2–K1 speed difference), which is
    /// otherwise refused; the constants file is marked short_record.
    #[arg(long)]
    allow_short_record: bool,
    /// Fit a linear trend of the mean level (m/yr) beside Z0; Z0 is then the mean level at the
    /// record's central instant. Prediction does not extrapolate the trend.
    #[arg(long)]
    trend: bool,
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
    let mut inference_rules = match &a.infer_from {
        Some(path) => inference_rules_from(path)?,
        None => Vec::new(),
    };
    for spec in &a.infer {
        let rule = parse_infer(spec)?;
        inference_rules.retain(|r| {
            !r.inferred.eq_ignore_ascii_case(&rule.inferred)
                && !r.reference.eq_ignore_ascii_case(&rule.reference)
        });
        inference_rules.push(rule);
    }
    let settings = AnalysisSettings {
        rayleigh_factor: a.rayleigh,
        constituents: a.constituents.clone(),
        infer: !a.no_inference,
        inference_rules,
        nodal: a.nodal.into(),
        allow_short: a.allow_short_record,
        trend: a.trend,
    };
    let given = a.out.clone().map(DataOut::from_option);
    let mut stdout = Stdout::lock();
    let o = match (&a.record, &a.project) {
        (Some(record), _) => {
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
                AnalyseRequest {
                    naive_offset: naive,
                    qc: (!a.no_qc).then_some(&qc),
                    settings: &settings,
                    gauge_id: None,
                    levels,
                    inference_reference_file: a.infer_from.as_deref(),
                },
                sink(&out, &mut stdout),
            )
            .map_err(|e| naive_time_hint(e, naive.is_some(), "a record"))?
        }
        (None, Some(project)) => {
            let p = Project::load(project)?;
            let g = find_gauge(&p, a.gauge.as_deref().unwrap_or_default())?;
            let out = given.unwrap_or_else(|| {
                DataOut::File(p.spec.output.dir.join(format!("{}.constants.toml", g.id)))
            });
            analyse_gauge(
                g,
                AnalyseRequest {
                    naive_offset: p.gauge_naive_offset(g),
                    qc: (!a.no_qc).then_some(&p.spec.qc),
                    settings: &settings,
                    gauge_id: Some(&g.id),
                    levels: "above chart datum",
                    inference_reference_file: a.infer_from.as_deref(),
                },
                sink(&out, &mut stdout),
            )?
        }
        (None, None) => anyhow::bail!("give a record, or --project and --gauge"),
    };
    drop(stdout);
    print_analysis(&o);
    Ok(Outcome::Done)
}

/// Parses `INFERRED=REFERENCE:RATIO:PHASE_DIFF_DEG[:U_RATIO:U_PHASE_DEG]` (`--infer`).
fn parse_infer(spec: &str) -> anyhow::Result<InferenceRule> {
    let bad = |why: &str| {
        anyhow::anyhow!(
            "--infer {spec}: {why}; expected INFERRED=REFERENCE:RATIO:PHASE_DIFF_DEG[:U_RATIO:U_PHASE_DEG], e.g. K2=S2:0.27:+3.0"
        )
    };
    let (inferred, rest) = spec.split_once('=').ok_or_else(|| bad("no '='"))?;
    let parts: Vec<&str> = rest.split(':').collect();
    if parts.len() != 3 && parts.len() != 5 {
        return Err(bad(&format!(
            "{} fields after '=', expected 3 or 5",
            parts.len()
        )));
    }
    let num = |s: &str, what: &str| -> anyhow::Result<f64> {
        s.trim()
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite())
            .ok_or_else(|| bad(&format!("{what}: expected a number, found '{s}'")))
    };
    let ratio = num(parts[1], "ratio")?;
    if ratio <= 0.0 {
        return Err(bad(&format!(
            "ratio: expected a positive number, found {ratio}"
        )));
    }
    let phase_diff_deg = num(parts[2], "phase difference")?;
    let (u_ratio, u_phase_diff_deg) = if parts.len() == 5 {
        let (ur, up) = (
            num(parts[3], "u of the ratio")?,
            num(parts[4], "u of the phase")?,
        );
        if ur < 0.0 || up < 0.0 {
            return Err(bad("uncertainties must not be negative"));
        }
        (Some(ur), Some(up))
    } else {
        (None, None)
    };
    Ok(InferenceRule {
        inferred: inferred.trim().to_string(),
        reference: parts[0].trim().to_string(),
        ratio,
        phase_diff_deg,
        u_ratio,
        u_phase_diff_deg,
        basis: InferenceBasis::Given,
    })
}

/// "S2 ≈ 0.854 m, MS4 (amplitude unknown)".
fn absorbed_list(f: &ebbwise::compute::harmonic::Fitted) -> String {
    f.absorbs
        .iter()
        .map(|a| match a.expected_amplitude_m {
            Some(e) => format!("{} ≈ {e:.4} m", a.constituent.name),
            None => format!("{} (amplitude unknown)", a.constituent.name),
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// What the residual says: its parts against the record's noise, the spectrum's colour, a
/// level step or a trend.
fn print_diagnostics(w: &mut impl Write, an: &ebbwise::compute::harmonic::Analysis) {
    let d = &an.diagnostics;
    let fast = d.fast_rms_m(an.residual_rms_m);
    let _ = writeln!(
        w,
        "  residual: lunar-day means {:.4} m RMS over {} days, the rest {:.4} m RMS against the record's sample-to-sample noise {}",
        d.level.rms_m,
        d.level.days,
        fast,
        d.noise_floor_m
            .map_or_else(|| "(not estimated)".to_string(), |f| format!("{f:.4} m"))
    );
    let coloured: Vec<(&str, f64)> = an
        .fitted
        .iter()
        .filter(|f| f.inference.is_none())
        .filter_map(|f| Some((f.constituent.name, f.noise_ratio?)))
        .collect();
    if let (Some(lo), Some(hi)) = (
        coloured.iter().min_by(|a, b| a.1.total_cmp(&b.1)),
        coloured.iter().max_by(|a, b| a.1.total_cmp(&b.1)),
    ) {
        let _ = writeln!(
            w,
            "  u(H), u(G) from the residual spectrum near each constituent: its level is {:.2}× the residual's mean square near {} up to {:.2}× near {}{}",
            lo.1,
            lo.0,
            hi.1,
            hi.0,
            match d.noise_ratio_mean_level {
                Some(r) => format!(", {r:.2}× near zero frequency (u(Z0))"),
                None => String::new(),
            }
        );
    } else {
        let _ = writeln!(
            w,
            "  u(H), u(G) from the white-noise formula: the record is too short for a residual spectrum"
        );
    }
    let lv = &d.level;
    if let (true, Some(s)) = (lv.step_found, lv.step) {
        let _ = writeln!(
            w,
            "  warning: the residual steps by {:+.3} m ± {:.3} near {} ({:.1} standard uncertainties): a datum shift of the gauge? Z0 lies between the two levels and long-period constituents may absorb part of the step; correct the record or analyse each side apart",
            s.size_m,
            s.u_size_m,
            utc_label(s.at_s),
            s.statistic
        );
    }
    if let (true, Some(t)) = (lv.trend_found, lv.trend) {
        let _ = writeln!(
            w,
            "  warning: the residual has a trend of {:+.4} m/yr ± {:.4} ({:.1} standard uncertainties): a drifting gauge or a changing mean level; {}",
            t.rate_m_per_yr,
            t.u_rate_m_per_yr,
            t.statistic,
            if an.trend.is_some() {
                "beyond the fitted trend"
            } else {
                "analyse with --trend, or correct the drift; long-period constituents may absorb part of it"
            }
        );
    }
    if d.misfit(an.residual_rms_m) {
        let _ = writeln!(
            w,
            "  warning: the residual's fast part ({fast:.4} m RMS) is more than {}× the record's sample-to-sample noise: the model misses part of the signal (constituents not fitted, shallow-water tides, seiches, or gauge faults); u(H), u(G) allow for it through the residual spectrum",
            ebbwise::compute::harmonic::MISFIT_NOISE_FACTOR
        );
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
    if !o.set_aside_by_flag.is_empty() {
        let _ = writeln!(
            w,
            "  QC set aside {} of {} samples ({:.1} %), not analysed:",
            o.set_aside,
            o.samples_read,
            100.0 * o.set_aside as f64 / o.samples_read.max(1) as f64
        );
        for s in &o.set_aside_by_flag {
            let _ = writeln!(
                w,
                "    {:<14} {:>8} samples, {} to {}: {}",
                s.flag.as_str(),
                s.samples,
                utc_label(s.first_s),
                utc_label(s.last_s),
                s.flag.meaning()
            );
        }
        if 4 * o.set_aside > o.samples_read {
            let _ = writeln!(
                w,
                "  warning: QC set aside more than a quarter of the record; look at `ebbwise qc` for where and why before trusting these constants (or analyse with --no-qc if the flags are wrong)"
            );
        }
    }
    let _ = writeln!(
        w,
        "  Z0 {:.4} m ± {:.4} (1σ), levels {}{}",
        an.z0_m,
        an.u_z0_m,
        o.levels,
        if an.trend.is_some() {
            format!(
                ", mean level at {} (the record's centre)",
                utc_label(an.centre_s)
            )
        } else {
            String::new()
        }
    );
    if let Some((rate, u)) = an.trend {
        let _ = writeln!(
            w,
            "  trend {rate:+.4} m/yr ± {u:.4} (1σ), fitted; prediction does not extrapolate it"
        );
    }
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
            match f.inference {
                Some(i) => format!(
                    "  inferred from {} (×{:.4}, {:+.1}°, {})",
                    i.reference.name,
                    i.ratio,
                    i.phase_diff_deg,
                    i.basis.as_str()
                ),
                None if f.contaminated() => format!("  absorbs {}", absorbed_list(f)),
                None => String::new(),
            }
        );
    }
    let contaminated: Vec<_> = an
        .fitted
        .iter()
        .filter(|f| {
            f.inference.is_none()
                && f.absorbs.iter().any(|a| {
                    ebbwise::compute::harmonic::absorbed_beyond_fit(
                        a.expected_amplitude_m,
                        Some(f.u_amplitude_fit_m),
                    )
                })
        })
        .collect();
    if !contaminated.is_empty() {
        let _ = writeln!(
            w,
            "  contaminated: {}; the record cannot separate these, so the constants carry their signal, expected larger than the fit's own uncertainty (u(H), u(G) include the expected amplitudes; inferred constituents take their reference's)",
            contaminated
                .iter()
                .map(|f| format!("{} by {}", f.constituent.name, absorbed_list(f)))
                .collect::<Vec<_>>()
                .join("; ")
        );
    }
    let into_z0: Vec<&str> = an
        .unresolved
        .iter()
        .filter(|u| u.absorbed_by.name == "Z0")
        .map(|u| u.constituent.name)
        .collect();
    if !into_z0.is_empty() {
        let _ = writeln!(
            w,
            "  Z0 absorbs {} (long-period, not separable from the mean level in this record)",
            into_z0.join(", ")
        );
    }
    let lost: Vec<&str> = an
        .fitted
        .iter()
        .filter(|f| {
            f.u_phase_deg >= U_PHASE_UNIFORM_DEG - 1e-9
                && f.amplitude_m >= 2.0 * f.u_amplitude_fit_m
        })
        .map(|f| f.constituent.name)
        .collect();
    if !lost.is_empty() {
        let _ = writeln!(
            w,
            "  warning: the phase of {} is undetermined although the fit finds the constituent (its uncertainty is that of a phase uniform on the circle: the absorbed signal may be as large as it)",
            lost.join(", ")
        );
    }
    if an.short_record {
        let _ = writeln!(
            w,
            "  warning: the record spans {:.1} h, shorter than {:.1} h: analysed only because --allow-short-record was given; no species is separated from the next and the constants are not harmonic constants of the place",
            (an.span_s.1 - an.span_s.0) / 3600.0,
            ebbwise::compute::harmonic::min_record_h()
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
    print_diagnostics(&mut w, an);
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
