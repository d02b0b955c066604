//! `ebbwise qc`: quality control of gauge records and gauge-to-gauge comparison.
//!
//! For each gauge: the record with a flag column (`<id>.qc.csv`), a plot (`<id>.qc.svg`) and a
//! summary per flag. For the project's zoning: comparisons of gauges through the zoning's
//! correctors (see [`crate::compute::compare`]) — every pair of gauges feeding one zone, and
//! every gauge that lies inside a zone fed by another gauge — with the difference series in
//! `gauge-differences.csv`. Everything is summarised in `qc-summary.json`.
//!
//! A run limited to one gauge X writes X's files, `gauge-differences.X.csv` and
//! `qc-summary.X.json` ([`summary_file_name`]), and leaves the whole project's files alone.

use crate::io::text::QcDetail;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use std::fmt::Write as _;

use serde::Serialize;

use super::load::{prepare_series, GaugeMethod, Loaded};
use crate::compute::compare::{compare, CompareFinding, CompareSettings, Comparison, Prediction};
use crate::compute::locate::ZoneLocator;
use crate::compute::qc::{QcFlag, QcResult};
use crate::compute::zoning::{GaugeFeed, Zone};
use crate::io::atomic::{write_atomic, AtomicFile};
use crate::io::error::IoError;
use crate::io::gauge_csv::GaugeRecord;
use crate::io::numfmt::{push_fixed_str, HEIGHT_DECIMALS};
use crate::io::project::{GaugeSpec, InterpolationSpec, QcSpec};
use crate::io::qc_svg::{render_qc_svg, QcPlot};
use crate::io::timefmt::{push_utc, utc_time};

/// Layout name of `qc-summary.json`.
pub const QC_SCHEMA: &str = "ebbwise-qc-summary/2";

/// Name of the level column (and field) when levels are above chart datum: the tide.
pub const TIDE_COLUMN: &str = "tide_m";

/// Name of the level column (and field) when the record's datum relation is not known.
pub const RECORD_ZERO_COLUMN: &str = "level_above_record_zero_m";

/// Columns of `gauge-differences.csv`: the pair, the time of `a`'s sample, `a − b` in metres.
pub const DIFFERENCE_COLUMNS: [&str; 3] = ["pair", "time_utc", "difference_m"];

/// One flagged sample, for the summary.
#[derive(Debug, Clone, Serialize)]
pub struct FlaggedSample {
    /// Line in the record file.
    pub line: u64,
    /// Sample time, UTC (ISO 8601, to the millisecond).
    pub time_utc: String,
    /// Water level above chart datum, metres, when the record's datum relation is known.
    #[serde(
        skip_serializing_if = "Option::is_none",
        serialize_with = "crate::io::numfmt::ser_opt_height"
    )]
    pub tide_m: Option<f64>,
    /// Level above the record's zero, metres, when the datum relation is not known.
    #[serde(
        skip_serializing_if = "Option::is_none",
        serialize_with = "crate::io::numfmt::ser_opt_height"
    )]
    pub level_above_record_zero_m: Option<f64>,
    /// The flag.
    pub flag: &'static str,
    /// Why.
    pub detail: String,
}

/// QC of one gauge.
#[derive(Debug, Clone, Serialize)]
pub struct GaugeQcSummary {
    /// Gauge id.
    pub gauge: String,
    /// Record file.
    pub record: PathBuf,
    /// Samples read (rows with a time and a reading).
    pub samples: usize,
    /// Samples usable after QC.
    pub usable: usize,
    /// Samples QC set aside (`samples − usable`): a reduction with `[qc] enabled` does not use
    /// them, and interpolates across none that is flagged for its level.
    pub set_aside: usize,
    /// Rows without a reading (empty or a null value), not samples.
    pub rows_without_reading: usize,
    /// Rows whose own quality flag was not good, not samples.
    pub rows_flagged_in_file: usize,
    /// Nominal step, minutes.
    #[serde(serialize_with = "crate::io::numfmt::ser_minutes")]
    pub nominal_step_min: f64,
    /// Robust standard deviation of the spike residual, metres.
    #[serde(serialize_with = "crate::io::numfmt::ser_uncertainty")]
    pub robust_sigma_m: f64,
    /// Noise of the readings (robust, from second differences), metres.
    #[serde(serialize_with = "crate::io::numfmt::ser_uncertainty")]
    pub noise_sigma_m: f64,
    /// The rate and flat-line limits used on this record, and where each came from.
    pub limits: LimitsSummary,
    /// Samples per flag (every flag listed).
    pub flags: BTreeMap<&'static str, usize>,
    /// The first flagged samples (up to 10 per flag), in file order.
    pub first_flagged: Vec<FlaggedSample>,
    /// How the reducer uses the record.
    pub method: GaugeMethod,
    /// Files written.
    pub outputs: Vec<PathBuf>,
}

/// The rate and flat-line limits QC used on one record ([`crate::compute::qc::QcLimits`]).
#[derive(Debug, Clone, Serialize)]
pub struct LimitsSummary {
    /// Rate limit used, metres per hour.
    #[serde(serialize_with = "crate::io::numfmt::ser_height")]
    pub max_rate_m_per_h: f64,
    /// `project` (the `[qc]` key), `record` (1.5 × the record's own fast rate) or `default`
    /// (the 3 m/h floor).
    pub max_rate_from: &'static str,
    /// The record's own fast rate (99th percentile over 30-min baselines), metres per hour;
    /// `null` when the limit was set or the record is too short.
    #[serde(serialize_with = "crate::io::numfmt::ser_opt_height")]
    pub record_fast_rate_m_per_h: Option<f64>,
    /// Fewest repeated readings that make a flat line.
    pub flat_min_samples: usize,
    /// Shortest flat line, minutes.
    #[serde(serialize_with = "crate::io::numfmt::ser_minutes")]
    pub flat_min_duration_min: f64,
    /// `project` (either flat-line key set) or `default`.
    pub flat_rule_from: &'static str,
    /// Whether runs the record's tide explains as stands at a turning point are excused.
    pub stands_excused: bool,
    /// Resolution of the readings, metres.
    #[serde(serialize_with = "crate::io::numfmt::ser_height")]
    pub reading_resolution_m: f64,
    /// Runs long enough to be flat lines that were excused as stands.
    pub stands: usize,
}

impl LimitsSummary {
    /// The summary of the limits QC used.
    pub fn of(l: &crate::compute::qc::QcLimits) -> LimitsSummary {
        LimitsSummary {
            max_rate_m_per_h: l.max_rate_m_per_h,
            max_rate_from: l.max_rate_source.as_str(),
            record_fast_rate_m_per_h: l.record_fast_rate_m_per_h,
            flat_min_samples: l.flat_min_samples,
            flat_min_duration_min: l.flat_min_duration_min,
            flat_rule_from: l.flat_source.as_str(),
            stands_excused: l.stands_excused,
            reading_resolution_m: l.reading_resolution_m,
            stands: l.stands,
        }
    }
}

/// A gauge-to-gauge comparison, for the summary.
#[derive(Debug, Clone, Serialize)]
pub struct ComparisonSummary {
    /// Pair name used in `gauge-differences.csv`.
    pub pair: String,
    /// What `a` is.
    pub a: String,
    /// What `b` is.
    pub b: String,
    /// Differences computed.
    pub n: usize,
    /// Mean of `a − b`, metres.
    #[serde(serialize_with = "crate::io::numfmt::ser_height")]
    pub mean_m: f64,
    /// Standard deviation, metres.
    #[serde(serialize_with = "crate::io::numfmt::ser_uncertainty")]
    pub std_m: f64,
    /// Largest |a − b|, metres.
    #[serde(serialize_with = "crate::io::numfmt::ser_height")]
    pub max_abs_m: f64,
    /// When, UTC.
    pub max_abs_at_utc: String,
    /// Trend, metres per day.
    #[serde(serialize_with = "crate::io::numfmt::ser_height")]
    pub drift_m_per_day: f64,
    /// Extra time corrector on `b` that aligns the two best, minutes.
    #[serde(serialize_with = "crate::io::numfmt::ser_minutes")]
    pub best_lag_min: f64,
    /// Standard deviation at that lag, metres.
    #[serde(serialize_with = "crate::io::numfmt::ser_uncertainty")]
    pub std_at_best_lag_m: f64,
    /// Step found in the difference.
    pub step: Option<StepSummary>,
    /// The moving window with the steepest drift.
    pub window_drift: Option<WindowDriftSummary>,
    /// Whether the pair is flagged.
    pub flagged: bool,
    /// Why.
    pub findings: Vec<String>,
}

/// The steepest moving-window drift of a difference series, for the summary.
#[derive(Debug, Clone, Serialize)]
pub struct WindowDriftSummary {
    /// Start of the window, UTC.
    pub from_utc: String,
    /// End of the window, UTC.
    pub until_utc: String,
    /// Slope of the difference in the window, metres per day.
    #[serde(serialize_with = "crate::io::numfmt::ser_height")]
    pub rate_m_per_day: f64,
    /// Its standard error, metres per day.
    #[serde(serialize_with = "crate::io::numfmt::ser_uncertainty")]
    pub u_rate_m_per_day: f64,
    /// Whether it exceeds the limit (the pair is then flagged for it).
    pub flagged: bool,
}

/// A step found in a difference series, for the summary.
#[derive(Debug, Clone, Serialize)]
pub struct StepSummary {
    /// Time of the first difference after the step, UTC (ISO 8601, to the millisecond).
    pub time_utc: String,
    /// Size of the step (after − before), metres.
    #[serde(serialize_with = "crate::io::numfmt::ser_height")]
    pub size_m: f64,
}

/// The whole QC run.
#[derive(Debug, Clone, Serialize)]
pub struct QcSummary {
    /// Layout name.
    pub schema: &'static str,
    /// ebbwise version.
    pub ebbwise_version: &'static str,
    /// The caution.
    pub caution: &'static str,
    /// Quality control ran on every record of this run (`ebbwise qc` always runs it).
    pub qc_ran: bool,
    /// Whether the project's reductions (`reduce`, `check`, `correctors`, `apply`) run it too
    /// (`[qc] enabled`); `None` for a record checked outside a project.
    pub qc_in_reductions: Option<bool>,
    /// Per gauge.
    pub gauges: Vec<GaugeQcSummary>,
    /// Comparisons.
    pub comparisons: Vec<ComparisonSummary>,
    /// Why no comparison was made, when none was.
    pub comparisons_note: Option<String>,
    /// Files written besides the per-gauge ones.
    pub outputs: Vec<PathBuf>,
}

impl QcSummary {
    /// Whether any sample (other than `gap_before`) or any comparison is flagged.
    pub fn anything_flagged(&self) -> bool {
        self.gauges.iter().any(|g| g.usable < g.samples)
            || self.comparisons.iter().any(|c| c.flagged)
    }
}

/// The summary's file name: `qc-summary.json` for every gauge, `qc-summary.<id>.json` when the
/// run was limited to gauge `id` (so that it is never taken for the whole project's).
pub fn summary_file_name(only: Option<&str>) -> String {
    match only {
        None => "qc-summary.json".into(),
        Some(id) => format!("qc-summary.{}.json", file_stem_safe(id)),
    }
}

/// The difference series' file name, named like [`summary_file_name`].
fn differences_file_name(only: Option<&str>) -> String {
    match only {
        None => "gauge-differences.csv".into(),
        Some(id) => format!("gauge-differences.{}.csv", file_stem_safe(id)),
    }
}

/// Adds the summary file ([`summary_file_name`]) to the summary's outputs and writes it.
fn finish_summary(
    mut summary: QcSummary,
    out_dir: &Path,
    only: Option<&str>,
) -> Result<QcSummary, IoError> {
    let path = out_dir.join(summary_file_name(only));
    summary.outputs.push(path.clone());
    write_atomic(
        &path,
        serde_json::to_string_pretty(&summary)
            .expect("summary serialises")
            .as_bytes(),
    )?;
    Ok(summary)
}

fn file_stem_safe(id: &str) -> String {
    id.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect()
}

/// Writes the record with its flags, the plot, and returns the gauge's summary.
pub fn write_gauge_qc(
    g: &GaugeSpec,
    r: &GaugeRecord,
    q: &QcResult,
    method: GaugeMethod,
    band_m: (f64, f64),
    levels_above_datum: bool,
    out_dir: &Path,
) -> Result<GaugeQcSummary, IoError> {
    std::fs::create_dir_all(out_dir).map_err(|e| IoError::file(out_dir, e))?;
    let stem = file_stem_safe(&g.id);
    let csv_path = out_dir.join(format!("{stem}.qc.csv"));
    let mut f = AtomicFile::create(&csv_path, &[&g.record])?;
    let mut text = String::with_capacity(r.times_s.len() * 48 + 64);
    let level_col = if levels_above_datum {
        TIDE_COLUMN
    } else {
        RECORD_ZERO_COLUMN
    };
    let _ = writeln!(text, "line,time_utc,{level_col},qc_flags,qc_detail");
    // Samples and the rows that are not samples (no reading, flagged in the file), by line.
    let mut skipped = r.skipped_rows.iter().peekable();
    for i in 0..r.times_s.len() {
        while let Some(&&(line, t, why)) = skipped.peek() {
            if line > r.lines[i] {
                break;
            }
            let _ = writeln!(text, "{line},{},,{why},", utc_time(t));
            skipped.next();
        }
        let _ = write!(text, "{},", r.lines[i]);
        let t = r.times_s[i];
        push_utc(&mut text, t);
        text.push(',');
        push_fixed_str(&mut text, r.heights_m[i], HEIGHT_DECIMALS);
        text.push(',');
        text.push_str(&q.flags[i].label());
        text.push(',');
        let notes = q.notes_of(i);
        if !notes.is_empty() {
            let d: Vec<String> = notes
                .iter()
                .map(|n| {
                    format!(
                        "{}: {}",
                        n.flag.as_str(),
                        QcDetail {
                            reason: &n.reason,
                            lines: &r.lines
                        }
                    )
                })
                .collect();
            crate::io::soundings::push_csv_field_string(&mut text, &d.join("; "));
        }
        text.push('\n');
        if text.len() > 1 << 20 {
            f.write_all(text.as_bytes())?;
            text.clear();
        }
    }
    for &(line, t, why) in skipped {
        let _ = writeln!(text, "{line},{},,{why},", utc_time(t));
    }
    f.write_all(text.as_bytes())?;
    let csv_path = f.commit()?;
    let title = match &g.name {
        Some(n) => format!("Gauge {} ({}) — quality control", g.id, n),
        None => format!("Gauge {} — quality control", g.id),
    };
    let svg = render_qc_svg(&QcPlot {
        title: &title,
        times_s: &r.times_s,
        heights_m: &r.heights_m,
        flags: &q.flags,
        band_m,
        levels_above_datum,
    });
    let svg_path = write_atomic(&out_dir.join(format!("{stem}.qc.svg")), svg.as_bytes())?;
    let mut flags = BTreeMap::new();
    for f in QcFlag::ALL {
        flags.insert(f.as_str(), q.count(f));
    }
    // The first 10 samples of each flag.
    let mut per_flag = [0usize; crate::compute::qc::N_FLAGS];
    let first_flagged = q
        .notes
        .iter()
        .filter(|n| {
            per_flag[n.flag as usize] += 1;
            per_flag[n.flag as usize] <= 10
        })
        .map(|n| FlaggedSample {
            line: r.lines[n.sample],
            time_utc: utc_time(r.times_s[n.sample]),
            tide_m: levels_above_datum.then_some(r.heights_m[n.sample]),
            level_above_record_zero_m: (!levels_above_datum).then_some(r.heights_m[n.sample]),
            flag: n.flag.as_str(),
            detail: QcDetail {
                reason: &n.reason,
                lines: &r.lines,
            }
            .to_string(),
        })
        .collect();
    Ok(GaugeQcSummary {
        gauge: g.id.clone(),
        record: g.record.clone(),
        samples: r.times_s.len(),
        usable: q.usable_count(),
        set_aside: q.flags.len() - q.usable_count(),
        rows_without_reading: r.skipped_null,
        rows_flagged_in_file: r.skipped_flagged,
        nominal_step_min: q.nominal_step_s / 60.0,
        robust_sigma_m: q.robust_sigma_m,
        noise_sigma_m: q.noise_sigma_m,
        limits: LimitsSummary::of(&q.limits),
        flags,
        first_flagged,
        method,
        outputs: vec![csv_path, svg_path],
    })
}

/// QC of one record file outside a project (`ebbwise qc --record`). The plausible band is centred
/// on the record's median unless the spec gives one.
pub fn qc_single_record(
    g: &GaugeSpec,
    r: &GaugeRecord,
    qc_spec: &QcSpec,
    levels_above_datum: bool,
    out_dir: &Path,
) -> Result<QcSummary, IoError> {
    let mut qc_on = qc_spec.clone();
    qc_on.enabled = true;
    let prepared = prepare_series(&qc_on, &InterpolationSpec::default(), g, r);
    let q = prepared.qc.expect("QC is on");
    let t = qc_on.thresholds_for(g);
    let s = write_gauge_qc(
        g,
        r,
        &q,
        prepared.method,
        (t.band_min_m, t.band_max_m),
        levels_above_datum,
        out_dir,
    )?;
    let summary = QcSummary {
        qc_ran: true,
        qc_in_reductions: None,
        schema: QC_SCHEMA,
        ebbwise_version: env!("CARGO_PKG_VERSION"),
        caution: crate::CAUTION,
        gauges: vec![s],
        comparisons: Vec::new(),
        comparisons_note: Some("a single record has no neighbour to compare with".into()),
        outputs: Vec::new(),
    };
    finish_summary(summary, out_dir, None)
}

/// QC of a project's gauge records when the project does not load as a whole (e.g. a broken
/// zoning): records only, no comparison.
pub fn qc_records_only(
    project: &crate::io::project::Project,
    only: Option<&str>,
    out_dir: &Path,
    why: &str,
) -> Result<QcSummary, IoError> {
    let mut gauges = Vec::new();
    for g in &project.spec.gauges {
        if only.is_some_and(|o| o != g.id) {
            continue;
        }
        let r = crate::io::gauge_csv::read_gauge_record(g, project.gauge_naive_offset(g))?;
        let mut qc_on = project.spec.qc.clone();
        qc_on.enabled = true;
        let prepared = prepare_series(&qc_on, &project.spec.interpolation, g, &r);
        let q = prepared.qc.expect("QC is on");
        let t = qc_on.thresholds_for(g);
        gauges.push(write_gauge_qc(
            g,
            &r,
            &q,
            prepared.method,
            (t.band_min_m, t.band_max_m),
            true,
            out_dir,
        )?);
    }
    let summary = QcSummary {
        qc_ran: true,
        qc_in_reductions: Some(project.spec.qc.enabled),
        schema: QC_SCHEMA,
        ebbwise_version: env!("CARGO_PKG_VERSION"),
        caution: crate::CAUTION,
        gauges,
        comparisons: Vec::new(),
        comparisons_note: Some(format!("no comparison: {why}")),
        outputs: Vec::new(),
    };
    finish_summary(summary, out_dir, only)
}

/// The comparisons the zoning allows: (pair name, a, b, evaluation times).
type Plan = (String, Prediction, Prediction, Vec<f64>, [usize; 2]);

fn planned_comparisons(loaded: &Loaded) -> Vec<Plan> {
    let single = |z: &Zone, f: &GaugeFeed| Zone {
        id: z.id.clone(),
        feeds: vec![GaugeFeed {
            weight: 1.0,
            ..f.clone()
        }],
        mean_level: z.mean_level,
    };
    let gid = |i: usize| loaded.gauges[i].id.as_str();
    let mut out = Vec::new();
    // 1. Pairs of gauges feeding one zone: each carried to the zone alone.
    for z in &loaded.zones {
        for (x, fa) in z.feeds.iter().enumerate() {
            for fb in &z.feeds[x + 1..] {
                if fa.gauge == fb.gauge {
                    continue;
                }
                let a = Prediction {
                    label: format!("{} carried to zone {}", gid(fb.gauge), z.id),
                    zone: single(z, fb),
                };
                let b = Prediction {
                    label: format!("{} carried to zone {}", gid(fa.gauge), z.id),
                    zone: single(z, fa),
                };
                // At a's own samples (shifted by its time corrector).
                let times = loaded.gauges[fb.gauge]
                    .series
                    .times_s
                    .iter()
                    .map(|t| t + fb.time_corrector_min * 60.0)
                    .collect();
                out.push((
                    format!("{}-{}@{}", gid(fb.gauge), gid(fa.gauge), z.id),
                    a,
                    b,
                    times,
                    [fa.gauge, fb.gauge],
                ));
            }
        }
    }
    // 2. Gauges inside a zone fed by another gauge: observed against carried.
    let locator = ZoneLocator::new(
        loaded
            .zoning
            .zones
            .iter()
            .map(|z| z.polygon_lonlat.clone())
            .collect(),
    );
    for (gi, gspec) in loaded.project.spec.gauges.iter().enumerate() {
        let Some(zi) = locator.locate(gspec.lon, gspec.lat) else {
            continue;
        };
        let z = &loaded.zones[zi];
        for f in z.feeds.iter().filter(|f| f.gauge != gi) {
            let a = Prediction {
                label: format!("{} observed", gid(gi)),
                zone: Zone {
                    id: gid(gi).to_string(),
                    feeds: vec![GaugeFeed {
                        gauge: gi,
                        weight: 1.0,
                        time_corrector_min: 0.0,
                        range_ratio: 1.0,
                    }],
                    mean_level: crate::compute::zoning::MeanLevelForm::Scaled,
                },
            };
            let b = Prediction {
                label: format!("{} carried to zone {}", gid(f.gauge), z.id),
                zone: single(z, f),
            };
            out.push((
                format!("{}-{}@{}", gid(gi), gid(f.gauge), z.id),
                a,
                b,
                loaded.gauges[gi].series.times_s.clone(),
                [gi, f.gauge],
            ));
        }
    }
    out
}

/// The gauge comparisons of a project (`ebbwise qc`'s: every pair of gauges feeding one zone,
/// every gauge inside a zone fed by another), by pair name; `None` where a pair had fewer than 3
/// common times.
pub fn gauge_comparisons(loaded: &Loaded) -> Vec<(String, Option<Comparison>)> {
    run_comparisons(loaded, planned_comparisons(loaded), None)
}

fn run_comparisons(
    loaded: &Loaded,
    plans: Vec<Plan>,
    only: Option<&str>,
) -> Vec<(String, Option<Comparison>)> {
    let spec = &loaded.project.spec;
    let settings = CompareSettings {
        max_mean_m: spec.qc.compare_max_mean_m,
        max_drift_m_per_day: spec.qc.compare_max_drift_m_per_day,
        max_lag_min: spec.qc.compare_max_lag_min,
        lag_search_min: spec.qc.compare_lag_search_min,
        shift_window_min: spec.qc.compare_shift_window_min,
        shift_k: spec.qc.shift_k,
        shift_min_m: spec.qc.shift_min_m,
        drift_window_days: spec.qc.compare_drift_window_days,
        max_window_drift_m_per_day: spec.qc.compare_max_window_drift_m_per_day,
    };
    let plans: Vec<_> = plans
        .into_iter()
        .filter(|p| only.is_none_or(|o| p.4.iter().any(|&g| loaded.gauges[g].id == o)))
        .collect();
    {
        use rayon::prelude::*;
        plans
            .par_iter()
            .map(|(name, a, b, times, _)| {
                (
                    name.clone(),
                    compare(
                        a,
                        b,
                        &loaded.gauges,
                        loaded.interp.as_ref(),
                        times,
                        &settings,
                    ),
                )
            })
            .collect()
    }
}

/// QC of every gauge of a loaded project (or only `only`), and the comparisons.
pub fn qc_project(
    loaded: &Loaded,
    only: Option<&str>,
    out_dir: &Path,
) -> Result<QcSummary, IoError> {
    let spec = &loaded.project.spec;
    let mut gauges = Vec::new();
    for (gi, g) in spec.gauges.iter().enumerate() {
        if only.is_some_and(|o| o != g.id) {
            continue;
        }
        let r = &loaded.records[gi];
        // With QC off in the project, `ebbwise qc` still runs it (that is what it is for).
        let q = match &loaded.qc[gi] {
            Some(q) => q.clone(),
            None => {
                crate::compute::qc::run_qc(&r.times_s, &r.heights_m, &spec.qc.thresholds_for(g))
            }
        };
        let t = spec.qc.thresholds_for(g);
        gauges.push(write_gauge_qc(
            g,
            r,
            &q,
            loaded.methods[gi].clone(),
            (t.band_min_m, t.band_max_m),
            true,
            out_dir,
        )?);
    }
    let plans = planned_comparisons(loaded);
    let n_plans = plans
        .iter()
        .filter(|p| only.is_none_or(|o| p.4.iter().any(|&g| loaded.gauges[g].id == o)))
        .count();
    let results = run_comparisons(loaded, plans, only);
    let mut comparisons = Vec::new();
    let mut diff_text = DIFFERENCE_COLUMNS.join(",");
    diff_text.push('\n');
    for (name, c) in &results {
        let Some(c) = c else { continue };
        for (t, d) in c.times_s.iter().zip(&c.diff_m) {
            crate::io::soundings::push_csv_field_string(&mut diff_text, name);
            diff_text.push(',');
            push_utc(&mut diff_text, *t);
            diff_text.push(',');
            push_fixed_str(&mut diff_text, *d, HEIGHT_DECIMALS);
            diff_text.push('\n');
        }
        comparisons.push(ComparisonSummary {
            pair: name.clone(),
            a: c.a.clone(),
            b: c.b.clone(),
            n: c.diff_m.len(),
            mean_m: c.mean_m,
            std_m: c.std_m,
            max_abs_m: c.max_abs_m,
            max_abs_at_utc: utc_time(c.max_abs_at_s),
            drift_m_per_day: c.drift_m_per_day,
            best_lag_min: c.best_lag_min,
            std_at_best_lag_m: c.std_at_best_lag_m,
            step: c.step.map(|s| StepSummary {
                time_utc: utc_time(s.at_s),
                size_m: s.size_m,
            }),
            window_drift: c.window_drift.map(|w| WindowDriftSummary {
                from_utc: utc_time(w.from_s),
                until_utc: utc_time(w.until_s),
                rate_m_per_day: w.rate_m_per_day,
                u_rate_m_per_day: w.u_rate_m_per_day,
                flagged: c
                    .findings
                    .iter()
                    .any(|f| matches!(f, CompareFinding::WindowDrift { .. })),
            }),
            flagged: !c.findings.is_empty(),
            findings: c.findings.iter().map(|f| f.to_string()).collect(),
        });
    }
    let comparisons_note = if n_plans == 0 {
        Some(match only {
            Some(id) => format!("no comparison involves gauge '{id}'"),
            None => "no zone is fed by two gauges and no gauge lies in a zone fed by another gauge: nothing to compare"
                .to_string(),
        })
    } else if comparisons.len() < n_plans {
        Some(format!(
            "{} of {} comparisons had fewer than 3 common times and were skipped",
            n_plans - comparisons.len(),
            n_plans
        ))
    } else {
        None
    };
    let mut outputs = Vec::new();
    std::fs::create_dir_all(out_dir).map_err(|e| IoError::file(out_dir, e))?;
    if !comparisons.is_empty() {
        outputs.push(write_atomic(
            &out_dir.join(differences_file_name(only)),
            diff_text.as_bytes(),
        )?);
    }
    let summary = QcSummary {
        qc_ran: true,
        qc_in_reductions: Some(spec.qc.enabled),
        schema: QC_SCHEMA,
        ebbwise_version: env!("CARGO_PKG_VERSION"),
        caution: crate::CAUTION,
        gauges,
        comparisons,
        comparisons_note,
        outputs,
    };
    finish_summary(summary, out_dir, only)
}
