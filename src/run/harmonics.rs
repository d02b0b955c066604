//! `ebbwise analyse` and `ebbwise predict`: harmonic analysis of a gauge record into a constants file,
//! and prediction from one.

use std::collections::BTreeMap;
use std::io::Write as _;
use std::path::{Path, PathBuf};

use super::load::prepare_series;
use crate::compute::harmonic::{
    analyse, high_low_waters, predict_grid, Analysis, AnalysisError, AnalysisSettings,
    HighLowWater, InferenceRule, INFERENCE_PAIRS,
};
use crate::compute::qc::QcFlag;
use crate::io::atomic::{Sink, SinkWriter};
use crate::io::constants::{
    read_constants, ConstantsFile, Provenance, LEVELS_CHART_DATUM, LEVELS_RECORD_ZERO,
};
use crate::io::correctors_file::sha256_file;
use crate::io::error::{IoError, Position};
use crate::io::gauge_csv::read_gauge_record;
use crate::io::numfmt::{push_fixed, HEIGHT_DECIMALS};
use crate::io::project::{GaugeSpec, InterpolationSpec, QcSpec};
use crate::io::timefmt::push_utc_bytes;

/// Why `ebbwise analyse` or `ebbwise predict` could not be done.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum HarmonicsError {
    /// A file could not be read or written, or its content is wrong.
    #[error(transparent)]
    Io(#[from] IoError),
    /// The record cannot be analysed.
    #[error("{}: {error}", record.display())]
    Analysis {
        /// The record.
        record: PathBuf,
        /// Why.
        error: AnalysisError,
    },
    /// The output file is the input file.
    #[error("the output would overwrite the {what} {}", path.display())]
    WouldOverwrite {
        /// The file.
        path: PathBuf,
        /// `record` or `constants file`.
        what: &'static str,
    },
    /// The prediction span is empty or reversed, or the step is not positive.
    #[error("the span must not be empty and the step must be positive")]
    EmptySpan,
    /// The prediction grid would exceed [`MAX_PREDICTED_VALUES`].
    #[error("{n} values: more than 50 million; use a longer step or a shorter span")]
    TooManyValues {
        /// Values the grid would hold.
        n: usize,
    },
}

/// Most values `predict_file` writes in one grid.
pub const MAX_PREDICTED_VALUES: usize = 50_000_000;

/// What `ebbwise analyse` did.
#[derive(Debug)]
pub struct AnalyseOutcome {
    /// The analysis.
    pub analysis: Analysis,
    /// The file written (`None` when the constants went to a stream).
    pub written: Option<PathBuf>,
    /// Samples read, and those set aside by QC (not analysed).
    pub samples_read: usize,
    /// Samples set aside by QC.
    pub set_aside: usize,
    /// What QC set aside, by flag (a sample may carry several flags).
    pub set_aside_by_flag: Vec<SetAside>,
    /// What the levels are above.
    pub levels: String,
}

/// Samples QC set aside for one reason.
#[derive(Debug, Clone, PartialEq)]
pub struct SetAside {
    /// The flag.
    pub flag: QcFlag,
    /// Samples carrying it.
    pub samples: usize,
    /// First and last of them, UTC seconds.
    pub first_s: f64,
    /// See `first_s`.
    pub last_s: f64,
}

/// The K2/S2, P1/K1, N2/M2 and Q1/O1 inference relations of a reference station's constants
/// file (see [`ConstantsFile::inference_rules`]).
pub fn inference_rules_from(path: &Path) -> Result<Vec<InferenceRule>, HarmonicsError> {
    let (file, _) = read_constants(path)?;
    let rules = file.inference_rules(&INFERENCE_PAIRS);
    if rules.is_empty() {
        return Err(IoError::content(
            Position::file(path),
            "expected at least one of the pairs K2/S2, P1/K1, N2/M2, Q1/O1 fitted (not inferred) to take an inference relation from, found none",
        )
        .into());
    }
    Ok(rules)
}

/// What `ebbwise analyse` is asked to do besides the record's reading (`spec`).
#[derive(Debug, Clone, Copy)]
pub struct AnalyseRequest<'a> {
    /// The UTC offset of times written without one.
    pub naive_offset: Option<chrono::FixedOffset>,
    /// QC to run first, `None` for none.
    pub qc: Option<&'a QcSpec>,
    /// The analysis's settings.
    pub settings: &'a AnalysisSettings,
    /// The gauge id, when analysed from a project.
    pub gauge_id: Option<&'a str>,
    /// What the levels are above ([`LEVELS_CHART_DATUM`] or [`LEVELS_RECORD_ZERO`]).
    pub levels: &'a str,
    /// The reference station's constants file the inference relations come from.
    pub inference_reference_file: Option<&'a Path>,
}

/// Analyses one gauge's record (read with `spec`), QC first unless `req.qc` is None, and writes
/// the constants to `out` (a file, or a stream such as standard output).
pub fn analyse_gauge(
    spec: &GaugeSpec,
    req: AnalyseRequest<'_>,
    out: Sink<'_>,
) -> Result<AnalyseOutcome, HarmonicsError> {
    let AnalyseRequest {
        naive_offset,
        qc,
        settings,
        gauge_id,
        levels,
        inference_reference_file,
    } = req;
    let r = read_gauge_record(spec, naive_offset)?;
    let record_sha256 = sha256_file(&spec.record)?;
    let mut qc_set_aside = None;
    let mut set_aside_by_flag: Vec<SetAside> = Vec::new();
    let (times, heights, set_aside) = match qc {
        Some(q) => {
            let mut q = q.clone();
            q.enabled = true;
            let p = prepare_series(&q, &InterpolationSpec::default(), spec, &r);
            let mut by_flag = BTreeMap::new();
            if let Some(res) = &p.qc {
                for (f, &t) in res
                    .flags
                    .iter()
                    .zip(&r.times_s)
                    .filter(|(f, _)| !f.usable())
                {
                    for flag in f.iter().filter(|x| x.excludes()) {
                        *by_flag.entry(flag.as_str().to_string()).or_insert(0) += 1;
                        match set_aside_by_flag.iter_mut().find(|s| s.flag == flag) {
                            Some(s) => {
                                s.samples += 1;
                                s.first_s = s.first_s.min(t);
                                s.last_s = s.last_s.max(t);
                            }
                            None => set_aside_by_flag.push(SetAside {
                                flag,
                                samples: 1,
                                first_s: t,
                                last_s: t,
                            }),
                        }
                    }
                }
            }
            set_aside_by_flag.sort_by_key(|s| std::cmp::Reverse(s.samples));
            qc_set_aside = Some(by_flag);
            let n = p.series.times_s.len();
            (p.series.times_s, p.series.heights_m, r.times_s.len() - n)
        }
        None => {
            let s = r.increasing_series();
            let n = s.times_s.len();
            (s.times_s, s.heights_m, r.times_s.len() - n)
        }
    };
    let analysis =
        analyse(&times, &heights, settings).map_err(|error| HarmonicsError::Analysis {
            record: spec.record.clone(),
            error,
        })?;
    let file = ConstantsFile::from_analysis(
        &analysis,
        Some(spec.record.display().to_string()),
        gauge_id.map(str::to_string),
        levels,
    )
    .with_provenance(Provenance {
        record_sha256: Some(record_sha256),
        naive_time_utc_offset: naive_offset.map(|o| o.to_string()),
        input_units: spec.units.as_str(),
        zero_above_datum_m: (levels == LEVELS_CHART_DATUM).then_some(spec.zero_above_datum_m),
        samples_read: r.times_s.len(),
        qc_set_aside,
        inference: settings.infer,
        inference_reference_file: inference_reference_file.map(|p| p.display().to_string()),
    });
    if let Some(path) = out.path() {
        if path == spec.record {
            return Err(HarmonicsError::WouldOverwrite {
                path: path.to_path_buf(),
                what: "record",
            });
        }
        if let Some(d) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(d).map_err(|e| IoError::file(d, e))?;
        }
    }
    let mut w = SinkWriter::open(out, &[spec.record.as_path()])?;
    w.write_all(file.to_toml().as_bytes())?;
    let written = w.finish()?;
    Ok(AnalyseOutcome {
        analysis,
        written,
        samples_read: r.times_s.len(),
        set_aside,
        set_aside_by_flag,
        levels: levels.into(),
    })
}

/// The name of the predicted level's column, by what the constants' levels are above:
/// `predicted_tide_m` above chart datum (the tide, as `tide_m` everywhere),
/// `predicted_level_above_record_zero_m` above the record's zero, and `predicted_level_m` when
/// the constants file does not say.
pub fn predicted_column(levels: Option<&str>) -> &'static str {
    match levels {
        Some(LEVELS_CHART_DATUM) => "predicted_tide_m",
        Some(LEVELS_RECORD_ZERO) => "predicted_level_above_record_zero_m",
        _ => "predicted_level_m",
    }
}

/// The constituents whose contamination `predict` and a project's constants warn of: the main
/// semidiurnal and diurnal ones, which carry most of the tide.
pub const MAIN_CONSTITUENTS: [&str; 8] = ["M2", "S2", "N2", "K2", "K1", "O1", "P1", "Q1"];

/// Why constants may not stand for the place: constants flagged `short_record`, and main
/// ([`MAIN_CONSTITUENTS`]) fitted constituents that carry an unresolved neighbour's signal larger than their own fit's
/// uncertainty ([`ConstantsFile::contaminated`]). One sentence each; empty when neither.
pub fn constants_warnings(file: &ConstantsFile) -> Vec<String> {
    let mut out = Vec::new();
    if file.short_record {
        out.push(
            "these constants come from a record shorter than the analysis's minimum (short_record = true): no species is separated from the next, so they are not harmonic constants of the place".to_string(),
        );
    }
    let c: Vec<_> = file
        .contaminated()
        .into_iter()
        .filter(|(name, _)| {
            MAIN_CONSTITUENTS
                .iter()
                .any(|m| m.eq_ignore_ascii_case(name))
        })
        .collect();
    if !c.is_empty() {
        out.push(format!(
            "these constants carry unresolved constituents' signal: {} (the record could not separate them; see [[unresolved]])",
            c.iter()
                .map(|(name, by)| format!("{name} absorbs {}", by.join(", ")))
                .collect::<Vec<_>>()
                .join("; ")
        ));
    }
    out
}

/// What `ebbwise predict` did.
#[derive(Debug)]
pub struct PredictOutcome {
    /// Grid values written.
    pub n: usize,
    /// High and low waters found.
    pub high_low_waters: Vec<HighLowWater>,
    /// Files written (not the outputs that went to a stream).
    pub written: Vec<PathBuf>,
    /// What the levels are above (from the constants file).
    pub levels: Option<String>,
    /// Seconds spent computing the grid and the high and low waters (not writing).
    pub compute_s: f64,
    /// Why the constants may not stand for the place ([`constants_warnings`]).
    pub warnings: Vec<String>,
}

/// Predicts from a constants file on `t0 + i·step` up to `t1` and writes the series and the
/// high/low waters to files.
pub fn predict_file(
    constants: &Path,
    t0_s: f64,
    t1_s: f64,
    step_s: f64,
    out: &Path,
    high_low_waters_out: &Path,
) -> Result<PredictOutcome, HarmonicsError> {
    predict_to(
        constants,
        t0_s,
        t1_s,
        step_s,
        Sink::File(out),
        Sink::File(high_low_waters_out),
    )
}

/// [`predict_file`] with each output a file or a stream (standard output, say).
pub fn predict_to(
    constants: &Path,
    t0_s: f64,
    t1_s: f64,
    step_s: f64,
    out: Sink<'_>,
    high_low_waters_out: Sink<'_>,
) -> Result<PredictOutcome, HarmonicsError> {
    if step_s.is_nan() || step_s <= 0.0 || t1_s.is_nan() || t0_s.is_nan() || t1_s < t0_s {
        return Err(HarmonicsError::EmptySpan);
    }
    let n = ((t1_s - t0_s) / step_s).floor() as usize + 1;
    if n > MAX_PREDICTED_VALUES {
        return Err(HarmonicsError::TooManyValues { n });
    }
    let (file, k) = read_constants(constants)?;
    for p in [out.path(), high_low_waters_out.path()]
        .into_iter()
        .flatten()
    {
        if p == constants {
            return Err(HarmonicsError::WouldOverwrite {
                path: p.to_path_buf(),
                what: "constants file",
            });
        }
    }
    let clock = std::time::Instant::now();
    let h = predict_grid(&k, t0_s, step_s, n);
    let ex = high_low_waters(&k, t0_s, step_s, &h);
    let compute_s = clock.elapsed().as_secs_f64();
    let level_col = predicted_column(file.levels.as_deref());
    let mut f = SinkWriter::open(out, &[constants])?;
    let mut buf: Vec<u8> = Vec::with_capacity(1 << 21);
    let _ = writeln!(buf, "time_utc,{level_col}");
    for (i, v) in h.iter().enumerate() {
        let t = t0_s + i as f64 * step_s;
        push_utc_bytes(&mut buf, t);
        buf.push(b',');
        push_fixed(&mut buf, *v, HEIGHT_DECIMALS);
        buf.push(b'\n');
        if buf.len() > 1 << 20 {
            f.write_all(&buf)?;
            buf.clear();
        }
    }
    f.write_all(&buf)?;
    let mut written: Vec<PathBuf> = f.finish()?.into_iter().collect();
    let mut e: Vec<u8> = Vec::with_capacity(64 * ex.len() + 64);
    let _ = writeln!(e, "time_utc,{level_col},kind");
    for x in &ex {
        // A turning point's time is rounded to the millisecond, the rule of every written time.
        push_utc_bytes(&mut e, (x.t_s * 1000.0).round() / 1000.0);
        e.push(b',');
        push_fixed(&mut e, x.height_m, HEIGHT_DECIMALS);
        e.extend_from_slice(if x.high { b",high\n" } else { b",low\n" });
    }
    let mut f = SinkWriter::open(high_low_waters_out, &[constants])?;
    f.write_all(&e)?;
    written.extend(f.finish()?);
    Ok(PredictOutcome {
        n,
        high_low_waters: ex,
        written,
        warnings: constants_warnings(&file),
        levels: file.levels,
        compute_s,
    })
}
