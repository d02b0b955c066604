//! `ebbwise analyse` and `ebbwise predict`: harmonic analysis of a gauge record into a constants file,
//! and prediction from one.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use super::load::prepare_series;
use crate::compute::harmonic::{
    analyse, high_low_waters, predict_grid, Analysis, AnalysisError, AnalysisSettings, HighLowWater,
};
use crate::io::atomic::{write_atomic, AtomicFile};
use crate::io::constants::{read_constants, ConstantsFile};
use crate::io::error::IoError;
use crate::io::gauge_csv::read_gauge_record;
use crate::io::project::{GaugeSpec, InterpolationSpec, QcSpec};

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
    /// The file written.
    pub written: PathBuf,
    /// Samples read, and those set aside by QC (not analysed).
    pub samples_read: usize,
    /// Samples set aside by QC.
    pub set_aside: usize,
    /// What the levels are above.
    pub levels: String,
}

/// Analyses one gauge's record (read with `spec`), QC first unless `qc` is None, and writes the
/// constants to `out`.
pub fn analyse_gauge(
    spec: &GaugeSpec,
    naive_offset: Option<chrono::FixedOffset>,
    qc: Option<&QcSpec>,
    settings: &AnalysisSettings,
    gauge_id: Option<String>,
    levels: &str,
    out: &Path,
) -> Result<AnalyseOutcome, HarmonicsError> {
    let r = read_gauge_record(spec, naive_offset)?;
    let (times, heights, set_aside) = match qc {
        Some(q) => {
            let mut q = q.clone();
            q.enabled = true;
            let p = prepare_series(&q, &InterpolationSpec::default(), spec, &r);
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
        gauge_id,
        levels,
    );
    if out == spec.record {
        return Err(HarmonicsError::WouldOverwrite {
            path: out.to_path_buf(),
            what: "record",
        });
    }
    if let Some(d) = out.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(d).map_err(|e| IoError::file(d, e))?;
    }
    let written = write_atomic(out, file.to_toml().as_bytes())?;
    Ok(AnalyseOutcome {
        analysis,
        written,
        samples_read: r.times_s.len(),
        set_aside,
        levels: levels.into(),
    })
}

/// What `ebbwise predict` did.
#[derive(Debug)]
pub struct PredictOutcome {
    /// Grid values written.
    pub n: usize,
    /// High and low waters found.
    pub high_low_waters: Vec<HighLowWater>,
    /// Files written.
    pub written: Vec<PathBuf>,
    /// What the levels are above (from the constants file).
    pub levels: Option<String>,
    /// Seconds spent computing the grid and the high and low waters (not writing).
    pub compute_s: f64,
}

/// Predicts from a constants file on `t0 + i·step` up to `t1` and writes the series and the
/// high/low waters.
pub fn predict_file(
    constants: &Path,
    t0_s: f64,
    t1_s: f64,
    step_s: f64,
    out: &Path,
    high_low_waters_out: &Path,
) -> Result<PredictOutcome, HarmonicsError> {
    if step_s.is_nan() || step_s <= 0.0 || t1_s.is_nan() || t0_s.is_nan() || t1_s < t0_s {
        return Err(HarmonicsError::EmptySpan);
    }
    let n = ((t1_s - t0_s) / step_s).floor() as usize + 1;
    if n > MAX_PREDICTED_VALUES {
        return Err(HarmonicsError::TooManyValues { n });
    }
    let (file, k) = read_constants(constants)?;
    for p in [out, high_low_waters_out] {
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
    let whole_seconds = step_s.fract() == 0.0 && t0_s.fract() == 0.0;
    let mut f = AtomicFile::create(out, &[constants])?;
    let mut buf: Vec<u8> = Vec::with_capacity(1 << 21);
    buf.extend_from_slice(b"time_utc,predicted_level_m\n");
    let mut label = String::with_capacity(32);
    for (i, v) in h.iter().enumerate() {
        let t = t0_s + i as f64 * step_s;
        label.clear();
        if whole_seconds {
            crate::compute::push_utc_seconds(&mut label, t as i64);
        } else {
            label.push_str(&crate::compute::utc_label(t));
        }
        buf.extend_from_slice(label.as_bytes());
        buf.push(b',');
        crate::compute::fixed::push_fixed(&mut buf, *v, 4);
        buf.push(b'\n');
        if buf.len() > 1 << 20 {
            f.write_all(&buf)?;
            buf.clear();
        }
    }
    f.write_all(&buf)?;
    let mut written = vec![f.commit()?];
    let mut e = String::from("time_utc,predicted_level_m,kind\n");
    for x in &ex {
        let _ = writeln!(
            e,
            "{},{:.4},{}",
            crate::compute::utc_label((x.t_s).round()),
            x.height_m,
            if x.high { "high" } else { "low" }
        );
    }
    written.push(write_atomic(high_low_waters_out, e.as_bytes())?);
    Ok(PredictOutcome {
        n,
        high_low_waters: ex,
        written,
        levels: file.levels,
        compute_s,
    })
}
