//! `ebbwise datums`: the observed high and low waters and the tidal datums of a gauge record,
//! written to a datums file ([`crate::io::datums_file`]).

use std::path::{Path, PathBuf};

use super::load::prepare_series;
use crate::compute::datums::{datums, Datums, DatumsError};
use crate::compute::extrema::{tabulate, ExtremaError, ExtremaSettings, Tabulation};
use crate::io::atomic::{Sink, SinkWriter};
use crate::io::correctors_file::sha256_file;
use crate::io::datums_file::{DatumsFile, DatumsProvenance};
use crate::io::error::IoError;
use crate::io::gauge_csv::read_gauge_record;
use crate::io::project::{GaugeSpec, InterpolationSpec, QcSpec};

/// Why `ebbwise datums` could not be done.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum DatumsRunError {
    /// A file could not be read or written, or its content is wrong.
    #[error(transparent)]
    Io(#[from] IoError),
    /// The record's high and low waters cannot be found.
    #[error("{}: {error}", record.display())]
    Extrema {
        /// The record.
        record: PathBuf,
        /// Why.
        error: ExtremaError,
    },
    /// The record is too short for datums.
    #[error("{}: {error}", record.display())]
    Datums {
        /// The record.
        record: PathBuf,
        /// Why.
        error: DatumsError,
    },
    /// The output file is the record.
    #[error("the output would overwrite the record {}", path.display())]
    WouldOverwrite {
        /// The file.
        path: PathBuf,
    },
}

/// What `ebbwise datums` is asked to do besides reading the record (`spec`).
#[derive(Debug, Clone, Copy)]
pub struct DatumsRequest<'a> {
    /// The UTC offset of times written without one.
    pub naive_offset: Option<chrono::FixedOffset>,
    /// QC to run first, `None` for none.
    pub qc: Option<&'a QcSpec>,
    /// The gauge id, when computed from a project.
    pub gauge_id: Option<&'a str>,
    /// Whether the record's zero is tied to chart datum (`spec.zero_above_datum_m` holds).
    pub tied_to_chart_datum: bool,
}

/// What `ebbwise datums` did.
#[derive(Debug)]
pub struct DatumsOutcome {
    /// The high and low waters.
    pub tabulation: Tabulation,
    /// The datums, in the record's levels (above chart datum when tied, else above the zero).
    pub datums: Datums,
    /// The file as written.
    pub file: DatumsFile,
    /// The file written (`None` when it went to a stream).
    pub written: Option<PathBuf>,
    /// Rows read, and samples QC set aside.
    pub samples_read: usize,
    /// Samples set aside by QC (or left out as non-increasing).
    pub set_aside: usize,
}

/// Tabulates one gauge's record (QC first unless `req.qc` is None), computes its datums and
/// writes the datums file to `out`.
pub fn datums_of_gauge(
    spec: &GaugeSpec,
    req: DatumsRequest<'_>,
    out: Sink<'_>,
) -> Result<DatumsOutcome, DatumsRunError> {
    let r = read_gauge_record(spec, req.naive_offset)?;
    let record_sha256 = sha256_file(&spec.record)?;
    let series = match req.qc {
        Some(q) => {
            let mut q = q.clone();
            q.enabled = true;
            prepare_series(&q, &InterpolationSpec::default(), spec, &r).series
        }
        None => r.increasing_series(),
    };
    let set_aside = r.times_s.len() - series.times_s.len();
    let settings = ExtremaSettings {
        max_gap_s: spec.max_gap_min * 60.0,
        ..ExtremaSettings::default()
    };
    let tab = tabulate(&series.times_s, &series.heights_m, &settings).map_err(|error| {
        DatumsRunError::Extrema {
            record: spec.record.clone(),
            error,
        }
    })?;
    let d = datums(&tab).map_err(|error| DatumsRunError::Datums {
        record: spec.record.clone(),
        error,
    })?;
    let file = DatumsFile::new(
        &d,
        &tab,
        &settings,
        DatumsProvenance {
            source: Some(spec.record.display().to_string()),
            gauge: req.gauge_id.map(str::to_string),
            zero_above_datum_m: req.tied_to_chart_datum.then_some(spec.zero_above_datum_m),
            samples_read: Some(r.times_s.len()),
            qc_applied: Some(req.qc.is_some()),
            record_sha256: Some(record_sha256),
        },
    );
    if let Some(path) = out.path() {
        if same_file(path, &spec.record) {
            return Err(DatumsRunError::WouldOverwrite {
                path: path.to_path_buf(),
            });
        }
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|e| IoError::file(dir, e))?;
        }
    }
    let mut w = SinkWriter::open(out, &[spec.record.as_path()])?;
    w.write_all(file.to_toml().as_bytes())?;
    let written = w.finish()?;
    Ok(DatumsOutcome {
        tabulation: tab,
        datums: d,
        file,
        written,
        samples_read: r.times_s.len(),
        set_aside,
    })
}

/// Whether two paths name the same file (or the same path when either does not exist).
fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}
