//! `ebbwise transfer`: a short-term (subordinate) gauge's long-term datums and datum relation by
//! simultaneous comparison with a control gauge whose long-term datums are known
//! ([`crate::compute::transfer`]), written to a datum-transfer file
//! ([`crate::io::transfer_file`]).
//!
//! Both records are read on their own zeros (a project gauge's `zero_above_datum_m` is not
//! applied: the subordinate's is what the transfer finds, and the control's is taken from its
//! datums file), quality-controlled unless asked not to, cut to their overlap and tabulated
//! ([`crate::compute::extrema`]); their complete tidal days are paired
//! ([`crate::compute::transfer::pair_days`]). Chart datum at the control is the datums file's
//! zero relation: `zero_above_datum_m = z` there means chart datum lies at `−z` on the
//! control's zero.

use std::path::{Path, PathBuf};

use super::load::prepare_series;
use crate::compute::extrema::{tabulate, ExtremaError, ExtremaSettings, Tabulation, TIDAL_DAY_S};
use crate::compute::transfer::{
    compare_tidal_days, default_method, pair_days, transfer, Comparison, ControlDatums, Method,
    MethodReason, SubordinateDatums, TidalMeans, TransferError, MIN_DAYS,
};
use crate::io::atomic::{Sink, SinkWriter};
use crate::io::correctors_file::sha256_file;
use crate::io::datums_file::{read_datums, DatumsFile};
use crate::io::error::{IoError, Position};
use crate::io::gauge_csv::{read_gauge_record, GaugeRecord};
use crate::io::project::{GaugeSpec, InterpolationSpec, QcSpec};
use crate::io::transfer_file::{Inputs, TransferFile, TransferProvenance};

/// Fewest paired complete tidal days accepted by default: 15 tidal days (15.5 days) cover a
/// spring–neap cycle (14.77 days), so that the range ratios and level differences are not those
/// of part of a cycle only.
pub const DEFAULT_MIN_DAYS: usize = 15;

/// Why `ebbwise transfer` could not be done.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum TransferRunError {
    /// A file could not be read or written, or its content is wrong.
    #[error(transparent)]
    Io(#[from] IoError),
    /// A record's high and low waters cannot be found.
    #[error("{}: {error}", record.display())]
    Extrema {
        /// The record.
        record: PathBuf,
        /// Why.
        error: ExtremaError,
    },
    /// The two records do not overlap in time.
    #[error("{} (field time, lines {}–{}: {} to {}) and {} (lines {}–{}: {} to {}) do not overlap: there is no common period to compare", subordinate.path.display(), subordinate.first_line, subordinate.last_line, subordinate.first_utc, subordinate.last_utc, control.path.display(), control.first_line, control.last_line, control.first_utc, control.last_utc)]
    NoOverlap {
        /// The subordinate's record.
        subordinate: Box<RecordSpan>,
        /// The control's record.
        control: Box<RecordSpan>,
    },
    /// Too few paired complete tidal days in the common period.
    #[error("the common period of {} and {} ({} to {}) holds {days} complete tidal days (24.84 h) with high and low waters at both gauges, fewer than the minimum {min} (--min-days)", subordinate.display(), control.display(), from_utc, to_utc)]
    TooShort {
        /// The subordinate's record.
        subordinate: PathBuf,
        /// The control's record.
        control: PathBuf,
        /// The overlap's start, as written.
        from_utc: String,
        /// The overlap's end.
        to_utc: String,
        /// Paired days found.
        days: usize,
        /// Fewest accepted.
        min: usize,
    },
    /// The comparison or the transfer itself failed.
    #[error("{}: {error}", control_datums.display())]
    Transfer {
        /// The control's datums file (the transfer's long-term input).
        control_datums: PathBuf,
        /// Why.
        error: TransferError,
    },
    /// The output file is one of the inputs.
    #[error("the output would overwrite the input {}", path.display())]
    WouldOverwrite {
        /// The file.
        path: PathBuf,
    },
}

/// A record's extent, for messages.
#[derive(Debug, Clone)]
pub struct RecordSpan {
    /// The file.
    pub path: PathBuf,
    /// Its first and last sample's lines (1-based).
    pub first_line: u64,
    /// Last sample's line.
    pub last_line: u64,
    /// First and last sample's time, as written in messages.
    pub first_utc: String,
    /// Last sample's time.
    pub last_utc: String,
}

/// One gauge of a transfer: its record's spec and how to read it.
#[derive(Debug, Clone, Copy)]
pub struct GaugeInput<'a> {
    /// The record and its columns; `zero_above_datum_m` is not applied (module doc).
    pub spec: &'a GaugeSpec,
    /// The UTC offset of times written without one.
    pub naive_offset: Option<chrono::FixedOffset>,
    /// The id written in the file.
    pub id: &'a str,
}

/// What `ebbwise transfer` is asked to do.
#[derive(Debug, Clone, Copy)]
pub struct TransferRequest<'a> {
    /// The short-term gauge.
    pub subordinate: GaugeInput<'a>,
    /// The control gauge.
    pub control: GaugeInput<'a>,
    /// The control's datums file (`ebbwise-datums/1`, tied to chart datum).
    pub control_datums: &'a Path,
    /// Standard uncertainty of chart datum at the control, metres.
    pub u_control_datum_m: f64,
    /// With a project: the control's `zero_above_datum_m` there, which the datums file must
    /// have been computed with.
    pub control_zero_in_project_m: Option<f64>,
    /// QC to run on both records first, `None` for none.
    pub qc: Option<&'a QcSpec>,
    /// The method to use; `None`: by tide type ([`default_method`]).
    pub method: Option<Method>,
    /// Fewest paired tidal days accepted (at least [`MIN_DAYS`]).
    pub min_days: usize,
    /// The project file, when the gauges come from one.
    pub project: Option<&'a Path>,
}

/// What `ebbwise transfer` did.
#[derive(Debug)]
pub struct TransferOutcome {
    /// The comparison over the paired days.
    pub comparison: Comparison,
    /// The modified-range-ratio result.
    pub range_ratio: SubordinateDatums,
    /// The direct result.
    pub direct: SubordinateDatums,
    /// The method of the result.
    pub method: Method,
    /// Why the default would be what it is (also when `--method` overrode it).
    pub default: (Method, MethodReason),
    /// Whether the method was forced.
    pub forced: bool,
    /// The file as written.
    pub file: TransferFile,
    /// The file written (`None` when it went to a stream).
    pub written: Option<PathBuf>,
    /// The records' overlap, UTC seconds.
    pub common_s: (f64, f64),
    /// Samples read and set aside by QC (or left out as non-increasing): subordinate, control.
    pub samples: [(usize, usize); 2],
    /// The subordinate's time difference from the control, seconds.
    pub time_difference_s: f64,
    /// The control's datums file, as read.
    pub control_datums: DatumsFile,
}

/// A record read on its own zero, QC'd, as (times, heights), with what was read.
struct Read {
    record: GaugeRecord,
    times_s: Vec<f64>,
    heights_m: Vec<f64>,
}

fn on_own_zero(spec: &GaugeSpec) -> GaugeSpec {
    let mut g = spec.clone();
    let z = g.zero_above_datum_m;
    g.zero_above_datum_m = 0.0;
    g.mean_level_above_datum_m -= z;
    g.band_min_m = g.band_min_m.map(|b| b - z);
    g.band_max_m = g.band_max_m.map(|b| b - z);
    g
}

fn read(input: &GaugeInput<'_>, qc: Option<&QcSpec>) -> Result<Read, IoError> {
    let g = on_own_zero(input.spec);
    let r = read_gauge_record(&g, input.naive_offset)?;
    let series = match qc {
        Some(q) => {
            let mut q = q.clone();
            q.enabled = true;
            prepare_series(&q, &InterpolationSpec::default(), &g, &r).series
        }
        None => r.increasing_series(),
    };
    Ok(Read {
        times_s: series.times_s,
        heights_m: series.heights_m,
        record: r,
    })
}

fn span_of(path: &Path, r: &GaugeRecord) -> RecordSpan {
    let label = crate::io::timefmt::utc_label;
    let (lo, hi) = r
        .times_s
        .iter()
        .zip(&r.lines)
        .fold(None, |acc: Option<((f64, u64), (f64, u64))>, (&t, &l)| {
            Some(match acc {
                None => ((t, l), (t, l)),
                Some((a, b)) => (
                    if t < a.0 { (t, l) } else { a },
                    if t > b.0 { (t, l) } else { b },
                ),
            })
        })
        .unwrap_or(((f64::NAN, 0), (f64::NAN, 0)));
    RecordSpan {
        path: path.to_path_buf(),
        first_line: lo.1,
        last_line: hi.1,
        first_utc: label(lo.0),
        last_utc: label(hi.0),
    }
}

fn tab(
    spec: &GaugeSpec,
    t: &[f64],
    h: &[f64],
    common_s: (f64, f64),
) -> Result<Tabulation, TransferRunError> {
    let (mut ts, mut hs) = (Vec::new(), Vec::new());
    for (&ti, &hi) in t.iter().zip(h) {
        if ti >= common_s.0 && ti <= common_s.1 {
            ts.push(ti);
            hs.push(hi);
        }
    }
    let settings = ExtremaSettings {
        max_gap_s: spec.max_gap_min * 60.0,
        ..ExtremaSettings::default()
    };
    tabulate(&ts, &hs, &settings).map_err(|error| TransferRunError::Extrema {
        record: spec.record.clone(),
        error,
    })
}

/// The control's long-term datums on its zero, and its chart datum there, from its datums file.
fn control_from_file(
    path: &Path,
    f: &DatumsFile,
    u_cd_m: f64,
    zero_in_project_m: Option<f64>,
) -> Result<(ControlDatums, f64), IoError> {
    let at = || Position::file(path).field("zero_above_datum_m");
    let z = f.zero_above_datum_m.ok_or_else(|| {
        IoError::content(
            at(),
            "absent: the control's datums file must be tied to chart datum (write it with `ebbwise datums --zero-above-datum-m` or from a project), since chart datum at the control is its zero relation",
        )
    })?;
    if let Some(pz) = zero_in_project_m {
        if (pz - z).abs() > 1e-4 {
            return Err(IoError::content(
                at(),
                format!("expected the control's zero_above_datum_m of the project ({pz} m), found {z} m: the datums file was computed with another zero"),
            ));
        }
    }
    let m = |e: &crate::io::datums_file::LevelEntry| e.above_gauge_zero_m;
    let u = |e: &crate::io::datums_file::LevelEntry| e.u_m;
    Ok((
        ControlDatums {
            datums: TidalMeans {
                mhw_m: m(&f.mhw),
                mlw_m: m(&f.mlw),
                mhhw_m: m(&f.mhhw),
                mllw_m: m(&f.mllw),
                msl_m: m(&f.msl),
            },
            u: TidalMeans {
                mhw_m: u(&f.mhw),
                mlw_m: u(&f.mlw),
                mhhw_m: u(&f.mhhw),
                mllw_m: u(&f.mllw),
                msl_m: u(&f.msl),
            },
            chart_datum_m: -z,
            u_chart_datum_m: u_cd_m,
        },
        z,
    ))
}

/// The reason for the default method, in words (written in the file).
pub fn reason_words(reason: &MethodReason) -> String {
    match reason {
        MethodReason::Semidiurnal { diurnal_share } => format!(
            "default: semidiurnal or mixed tide ({:.0} % of the control's paired days have a single high and low water), modified range ratio",
            100.0 * diurnal_share
        ),
        MethodReason::Diurnal { diurnal_share } => format!(
            "default: diurnal tide ({:.0} % of the control's paired days have a single high and low water), direct level transfer",
            100.0 * diurnal_share
        ),
        MethodReason::SmallRange { mn_m } => format!(
            "default: small range (mean range {mn_m:.3} m over the common period, below {} m), direct level transfer",
            crate::compute::transfer::SMALL_RANGE_M
        ),
    }
}

/// Runs the comparison and both transfers, and writes the file to `out`.
pub fn transfer_datum(
    req: TransferRequest<'_>,
    out: Sink<'_>,
) -> Result<TransferOutcome, TransferRunError> {
    let (sub_spec, ctl_spec) = (req.subordinate.spec, req.control.spec);
    let datums_file = match req.project {
        Some(_) => crate::io::project::gauge_datums(ctl_spec, req.control_datums)?,
        None => read_datums(req.control_datums)?,
    };
    let (control, control_zero_m) = control_from_file(
        req.control_datums,
        &datums_file,
        req.u_control_datum_m,
        req.control_zero_in_project_m,
    )?;
    let s = read(&req.subordinate, req.qc)?;
    let c = read(&req.control, req.qc)?;
    let first_last = |t: &[f64]| -> Option<(f64, f64)> { Some((*t.first()?, *t.last()?)) };
    let overlap = match (first_last(&s.times_s), first_last(&c.times_s)) {
        (Some(a), Some(b)) if a.0.max(b.0) < a.1.min(b.1) => Some((a.0.max(b.0), a.1.min(b.1))),
        _ => None,
    };
    let Some(common_s) = overlap else {
        return Err(TransferRunError::NoOverlap {
            subordinate: Box::new(span_of(&sub_spec.record, &s.record)),
            control: Box::new(span_of(&ctl_spec.record, &c.record)),
        });
    };
    let ts = tab(sub_spec, &s.times_s, &s.heights_m, common_s)?;
    let tc = tab(ctl_spec, &c.times_s, &c.heights_m, common_s)?;
    let paired = pair_days(&ts, &s.times_s, &s.heights_m, &tc);
    let n_pairs = paired.as_ref().map_or(0, |p| p.control.len());
    let min = req.min_days.max(MIN_DAYS);
    let label = crate::io::timefmt::utc_label;
    let paired = match paired {
        Some(p) if n_pairs >= min => p,
        _ => {
            return Err(TransferRunError::TooShort {
                subordinate: sub_spec.record.clone(),
                control: ctl_spec.record.clone(),
                from_utc: label(common_s.0),
                to_utc: label(common_s.1),
                days: n_pairs,
                min,
            })
        }
    };
    let sub_days: Vec<TidalMeans> = paired.subordinate.iter().map(|d| d.means).collect();
    let ctl_days: Vec<TidalMeans> = paired.control.iter().map(|d| d.means).collect();
    let as_transfer = |error| TransferRunError::Transfer {
        control_datums: req.control_datums.to_path_buf(),
        error,
    };
    let cmp = compare_tidal_days(&sub_days, &ctl_days).map_err(as_transfer)?;
    let mrr = transfer(&cmp, &control, Method::ModifiedRangeRatio).map_err(as_transfer)?;
    let direct = transfer(&cmp, &control, Method::DirectLevel).map_err(as_transfer)?;
    let default = default_method(&paired.control, &cmp);
    let method = req.method.unwrap_or(default.0);
    let first = paired.control[0].start_s;
    let last = paired.subordinate[paired.subordinate.len() - 1].start_s + TIDAL_DAY_S;
    let mut inputs = Inputs {
        subordinate_record: sub_spec.record.display().to_string(),
        subordinate_record_sha256: sha256_file(&sub_spec.record)?,
        control_record: ctl_spec.record.display().to_string(),
        control_record_sha256: sha256_file(&ctl_spec.record)?,
        control_datums: req.control_datums.display().to_string(),
        control_datums_sha256: sha256_file(req.control_datums)?,
        project: None,
        project_sha256: None,
    };
    if let Some(p) = req.project {
        inputs.project = Some(p.display().to_string());
        inputs.project_sha256 = Some(sha256_file(p)?);
    }
    let file = TransferFile::new(
        &cmp,
        &mrr,
        &direct,
        TransferProvenance {
            subordinate: req.subordinate.id.to_string(),
            control: req.control.id.to_string(),
            method,
            method_chosen_by: if req.method.is_some() {
                "--method".into()
            } else {
                reason_words(&default.1)
            },
            control_zero_above_datum_m: control_zero_m,
            u_control_datum_m: req.u_control_datum_m,
            common_s,
            days_s: (first, last),
            min_tidal_days: min,
            inputs,
        },
    );
    let mut input_paths: Vec<&Path> = vec![
        sub_spec.record.as_path(),
        ctl_spec.record.as_path(),
        req.control_datums,
    ];
    if let Some(p) = req.project {
        input_paths.push(p);
    }
    if let Some(path) = out.path() {
        if let Some(i) = input_paths.iter().find(|i| same_file(path, i)) {
            return Err(TransferRunError::WouldOverwrite {
                path: i.to_path_buf(),
            });
        }
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|e| IoError::file(dir, e))?;
        }
    }
    let mut w = SinkWriter::open(out, &input_paths)?;
    w.write_all(file.to_toml().as_bytes())?;
    let written = w.finish()?;
    let count = |r: &Read| {
        (
            r.record.times_s.len(),
            r.record.times_s.len() - r.times_s.len(),
        )
    };
    Ok(TransferOutcome {
        comparison: cmp,
        range_ratio: mrr,
        direct,
        method,
        default,
        forced: req.method.is_some(),
        file,
        written,
        common_s,
        samples: [count(&s), count(&c)],
        time_difference_s: paired.time_difference_s,
        control_datums: datums_file,
    })
}

/// Whether two paths name the same file (or the same path when either does not exist).
fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}
