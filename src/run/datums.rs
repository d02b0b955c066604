//! `ebbwise datums`: the observed high and low waters and the tidal datums of a gauge record,
//! written to a datums file ([`crate::io::datums_file`]).

use std::path::{Path, PathBuf};

use super::load::prepare_series;
use crate::compute::datums::{
    datums, harmonic_datums, ConstantUncertainties, Datums, DatumsError, HarmonicDatums,
};
use crate::compute::extrema::{tabulate, DayClass, ExtremaError, ExtremaSettings, Tabulation};
use crate::compute::lat::LatHatError;
use crate::io::atomic::{Sink, SinkWriter};
use crate::io::constants::{read_constants, ConstantsFile, LEVELS_CHART_DATUM};
use crate::io::correctors_file::sha256_file;
use crate::io::datums_file::{
    harmonic_entry, DatumsFile, DatumsProvenance, HarmonicDatumsFile, LevelEntry, LevelsReference,
    HARMONIC_DATUMS_FORMAT, LAT_HAT_METHOD, Z0_METHOD,
};
use crate::io::error::IoError;
use crate::io::gauge_csv::read_gauge_record;
use crate::io::project::{GaugeSpec, InterpolationSpec, QcSpec};
use crate::io::timefmt::{parse_time, utc_time, TimeFormat};

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
    /// LAT and HAT cannot be predicted from the constants.
    #[error("{}: {error}", constants.display())]
    LatHat {
        /// The constants file.
        constants: PathBuf,
        /// Why.
        error: LatHatError,
    },
    /// The constants' levels are above chart datum but the gauge zero's height is not known.
    #[error("{}: field 'levels': the levels are above chart datum but the file has no zero_above_datum_m, so no height above the gauge zero can be given: give --zero-above-datum-m", constants.display())]
    ZeroUnknown {
        /// The constants file.
        constants: PathBuf,
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
    /// LAT, HAT and Z0 from harmonic constants to add to the file.
    pub harmonic: Option<&'a HarmonicOutcome>,
    /// Where to write the observed high and low waters (CSV), if asked.
    pub high_low_waters: Option<&'a Path>,
}

/// Prediction span for LAT and HAT, Julian years (a nodal cycle).
pub const LAT_YEARS: f64 = crate::compute::lat::MIN_YEARS;
/// Prediction step for LAT and HAT, seconds.
pub const LAT_STEP_S: f64 = 360.0;
/// Start of the prediction when the constants file gives no record start: 2026-01-01T00:00Z.
pub const DEFAULT_LAT_START_S: f64 = 1_767_225_600.0;
/// Constants from a record shorter than this, days, get the short-span warning.
pub const YEAR_DAYS: f64 = 365.0;

/// LAT, HAT and Z0 of a constants file, as computed and as written.
#[derive(Debug, Clone)]
pub struct HarmonicOutcome {
    /// The constants file.
    pub constants: PathBuf,
    /// The levels on the constants' datum, with u.
    pub datums: HarmonicDatums,
    /// The entries written.
    pub lat: LevelEntry,
    /// HAT as written.
    pub hat: LevelEntry,
    /// Z0 as written.
    pub z0: LevelEntry,
    /// The reference used.
    pub reference: LevelsReference,
    /// Why the constants may not stand for the place.
    pub warnings: Vec<String>,
}

/// The constants' record span in days, when the file gives it.
fn record_days(file: &ConstantsFile) -> Option<(f64, f64)> {
    let t = |s: &Option<String>| {
        s.as_deref()
            .and_then(|x| parse_time(x, TimeFormat::Iso8601, None).ok())
    };
    Some((t(&file.record_start_utc)?, t(&file.record_end_utc)?))
}

/// Why LAT and HAT from these constants may mislead: the analysis's own warnings
/// ([`crate::run::harmonics::constants_warnings`]) and a record shorter than a year.
pub fn lat_warnings(file: &ConstantsFile) -> Vec<String> {
    let mut w = crate::run::harmonics::constants_warnings(file);
    match record_days(file) {
        Some((a, b)) if (b - a) / 86_400.0 < YEAR_DAYS => w.push(format!(
            "these constants come from {:.1} days of record, less than a year: LAT and HAT from them miss what such a record cannot resolve (the seasonal SA and SSA, and constituents it cannot separate from their neighbours, such as K2 from S2 or P1 from K1 under six months), so the place's LAT may lie lower and its HAT higher",
            (b - a) / 86_400.0
        )),
        Some(_) => {}
        None => w.push(
            "the constants file does not give its record's span (record_start_utc, record_end_utc): whether they resolve the constituents LAT needs cannot be judged".to_string(),
        ),
    }
    w
}

/// LAT and HAT over [`LAT_YEARS`] every [`LAT_STEP_S`] from the constants' record start, and
/// Z0, each with u, in both references. `zero_above_datum_m` is the gauge zero's height above
/// chart datum when the caller knows it (a project's gauge, a record's option); the constants
/// file's own `zero_above_datum_m` is used otherwise.
pub fn harmonic_datums_of(
    path: &Path,
    zero_above_datum_m: Option<f64>,
) -> Result<HarmonicOutcome, DatumsRunError> {
    let (file, k) = read_constants(path)?;
    let u = ConstantUncertainties {
        u_z0_m: file.u_z0_m.unwrap_or(0.0),
        u_amplitude_m: file
            .constituents
            .iter()
            .map(|c| c.u_amplitude_m.unwrap_or(0.0))
            .collect(),
        u_phase_deg: file
            .constituents
            .iter()
            .map(|c| c.u_phase_deg.unwrap_or(0.0))
            .collect(),
    };
    let start_s = record_days(&file).map_or(DEFAULT_LAT_START_S, |s| s.0);
    let d = harmonic_datums(&k, &u, start_s, LAT_YEARS, LAT_STEP_S).map_err(|error| {
        DatumsRunError::LatHat {
            constants: path.to_path_buf(),
            error,
        }
    })?;
    let reference = LevelsReference {
        above_chart_datum: file.levels.as_deref() == Some(LEVELS_CHART_DATUM),
        zero_above_datum_m: zero_above_datum_m.or(file.zero_above_datum_m),
    };
    let entry = |v, m: &str| {
        harmonic_entry(v, reference, m).ok_or_else(|| DatumsRunError::ZeroUnknown {
            constants: path.to_path_buf(),
        })
    };
    Ok(HarmonicOutcome {
        constants: path.to_path_buf(),
        lat: entry(&d.lat, LAT_HAT_METHOD)?,
        hat: entry(&d.hat, LAT_HAT_METHOD)?,
        z0: entry(&d.z0, Z0_METHOD)?,
        datums: d,
        reference,
        warnings: lat_warnings(&file),
    })
}

/// Writes LAT, HAT and Z0 alone (no record) to `out`.
pub fn write_harmonic_datums(
    h: &HarmonicOutcome,
    gauge: Option<&str>,
    out: Sink<'_>,
) -> Result<(HarmonicDatumsFile, Option<PathBuf>), DatumsRunError> {
    let utc = |t: f64| utc_time((t * 1000.0).round() / 1000.0);
    let f = HarmonicDatumsFile {
        format: HARMONIC_DATUMS_FORMAT.into(),
        constants: h.constants.display().to_string(),
        constants_sha256: sha256_file(&h.constants)?,
        gauge: gauge.map(str::to_string),
        zero_above_datum_m: h.reference.zero_above_datum_m,
        prediction_start_utc: utc(h.datums.start_s),
        prediction_years: h.datums.years,
        prediction_step_min: h.datums.step_s / 60.0,
        lat_at_utc: utc(h.datums.lat.at_s.unwrap_or(f64::NAN)),
        hat_at_utc: utc(h.datums.hat.at_s.unwrap_or(f64::NAN)),
        warnings: h.warnings.clone(),
        tool_version: format!("ebbwise {}", env!("CARGO_PKG_VERSION")),
        caution: crate::CAUTION.into(),
        lat: h.lat.clone(),
        hat: h.hat.clone(),
        z0: h.z0.clone(),
    };
    if let Some(path) = out.path() {
        if same_file(path, &h.constants) {
            return Err(DatumsRunError::WouldOverwrite {
                path: path.to_path_buf(),
            });
        }
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|e| IoError::file(dir, e))?;
        }
    }
    let mut w = SinkWriter::open(out, &[h.constants.as_path()])?;
    w.write_all(f.to_toml().as_bytes())?;
    let written = w.finish()?;
    Ok((f, written))
}

/// The observed high and low waters as CSV: `time_utc`, the level (`level_above_chart_datum_m`
/// when the zero is tied, else `level_above_zero_m`), `u_level_m`, `kind` (`high`, `low`),
/// `class` (`higher`, `lower` within its tidal day).
pub fn high_low_waters_csv(tab: &Tabulation, zero_above_datum_m: Option<f64>) -> String {
    let mut s = format!(
        "time_utc,{},u_level_m,kind,class\n",
        if zero_above_datum_m.is_some() {
            "level_above_chart_datum_m"
        } else {
            "level_above_zero_m"
        }
    );
    for e in &tab.extrema {
        s.push_str(&format!(
            "{},{:.4},{:.4},{},{}\n",
            utc_time((e.water.t_s * 1000.0).round() / 1000.0),
            e.water.height_m,
            e.u_height_m,
            if e.water.high { "high" } else { "low" },
            match e.class {
                DayClass::Higher => "higher",
                DayClass::Lower => "lower",
            }
        ));
    }
    s
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
    /// The high and low waters' CSV written, if asked.
    pub high_low_waters_written: Option<PathBuf>,
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
    let mut file = DatumsFile::new(
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
    if let Some(h) = req.harmonic {
        file.lat = Some(h.lat.clone());
        file.hat = Some(h.hat.clone());
        file.z0 = Some(h.z0.clone());
    }
    if let Some(path) = req.high_low_waters {
        if same_file(path, &spec.record) {
            return Err(DatumsRunError::WouldOverwrite {
                path: path.to_path_buf(),
            });
        }
    }
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
    let mut high_low_waters_written = None;
    if let Some(path) = req.high_low_waters {
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|e| IoError::file(dir, e))?;
        }
        let mut w = SinkWriter::open(Sink::File(path), &[spec.record.as_path()])?;
        let zero = req.tied_to_chart_datum.then_some(spec.zero_above_datum_m);
        w.write_all(high_low_waters_csv(&tab, zero).as_bytes())?;
        high_low_waters_written = w.finish()?;
    }
    Ok(DatumsOutcome {
        high_low_waters_written,
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
