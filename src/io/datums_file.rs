//! Tidal-datums files (TOML, layout `ebbwise-datums/1`).
//!
//! Written by `ebbwise datums`, read by a project's `[[gauge]] datums`. Every level is given
//! above chart datum (when the record's zero is tied to it) and above the gauge zero, heights
//! positive up, metres; `u_m` is its standard uncertainty (docs/datums.md). Layout:
//!
//! ```toml
//! format = "ebbwise-datums/1"
//! source = "gauges/orlick.csv"          # the record
//! gauge = "orlick"                      # when computed from a project
//! zero_above_datum_m = -1.2             # gauge zero above chart datum (absent: not tied)
//! record_start_utc = "2026-05-01T00:00:00.000Z"
//! record_end_utc = "2026-05-30T23:59:00.000Z"
//! days_start_utc = "…"                  # the complete tidal days used
//! days_end_utc = "…"
//! samples = 43200                       # finite samples tabulated
//! samples_read = 43210                  # rows of the record, before QC
//! qc_applied = true
//! complete_days = 28
//! incomplete_days = 2
//! high_waters = 55
//! low_waters = 55
//! doubles = 0
//! noise_m = 0.031                       # the record's noise (robust, second differences)
//! threshold_m = 0.037                   # a turning point's least height above its neighbours
//! smoothing_cutoff_min = 30.0
//! min_separation_h = 2.07
//! method = "…"
//! uncertainty_model = "…"
//! record_sha256 = "…"
//! tool_version = "ebbwise 0.1.0"
//! caution = "…"
//!
//! [msl]                                 # likewise mhw, mlw, mhhw, mllw, mtl, dtl
//! above_chart_datum_m = 2.5123
//! above_gauge_zero_m = 3.7123
//! u_m = 0.0121
//! days = 28
//!
//! [mn]                                  # likewise gt: a range, no reference
//! range_m = 3.1
//! u_m = 0.02
//! days = 28
//! ```
//!
//! Optional `[lat]`, `[hat]` and `[z0]` tables (the level's shape, with a `method`) hold LAT,
//! HAT and the harmonic Z0 when they are added from harmonic constants; a reader accepts them.

use std::path::Path;

use serde::{Deserialize, Serialize};

use super::error::{IoError, Position};
use super::numfmt::{round_to, HEIGHT_DECIMALS, UNCERTAINTY_DECIMALS};
use crate::compute::datums::{Datum, Datums, HarmonicLevel};
use crate::compute::extrema::{ExtremaSettings, Tabulation};

/// Layout name.
pub const DATUMS_FORMAT: &str = "ebbwise-datums/1";

/// A level datum as written.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct LevelEntry {
    /// Height above chart datum, metres (absent when the gauge zero is not tied to it).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub above_chart_datum_m: Option<f64>,
    /// Height above the gauge zero, metres.
    pub above_gauge_zero_m: f64,
    /// Standard uncertainty, metres.
    pub u_m: f64,
    /// Complete tidal days behind it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub days: Option<usize>,
    /// How it was found, when not from this file's tabulation (LAT, HAT, Z0).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub method: Option<String>,
}

/// A range as written.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RangeEntry {
    /// The range, metres.
    pub range_m: f64,
    /// Standard uncertainty, metres.
    pub u_m: f64,
    /// Complete tidal days behind it.
    pub days: usize,
}

/// A datums file as written.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct DatumsFile {
    /// Layout name, [`DATUMS_FORMAT`].
    pub format: String,
    /// The record.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source: Option<String>,
    /// The gauge id, when computed from a project.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub gauge: Option<String>,
    /// Height of the gauge zero above chart datum, metres (absent when not tied).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub zero_above_datum_m: Option<f64>,
    /// First sample, UTC.
    pub record_start_utc: String,
    /// Last sample, UTC.
    pub record_end_utc: String,
    /// Start of the first complete tidal day used, UTC.
    pub days_start_utc: String,
    /// End of the last complete tidal day used, UTC.
    pub days_end_utc: String,
    /// Finite samples tabulated.
    pub samples: usize,
    /// Rows of the record read, before QC.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub samples_read: Option<usize>,
    /// Whether quality control ran first.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub qc_applied: Option<bool>,
    /// Complete tidal days used.
    pub complete_days: usize,
    /// Tidal days the record touches but does not cover whole.
    pub incomplete_days: usize,
    /// High waters in the complete days.
    pub high_waters: usize,
    /// Low waters in the complete days.
    pub low_waters: usize,
    /// High or low waters that absorbed a double.
    pub doubles: usize,
    /// The record's noise, metres.
    pub noise_m: f64,
    /// A turning point's least height above its neighbours, metres.
    pub threshold_m: f64,
    /// Smoothing cut-off period, minutes.
    pub smoothing_cutoff_min: f64,
    /// Least time between a high and a low water, hours.
    pub min_separation_h: f64,
    /// The method, in words.
    pub method: String,
    /// The uncertainty model, in words.
    pub uncertainty_model: String,
    /// SHA-256 of the record file, lowercase hex.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub record_sha256: Option<String>,
    /// The program that wrote the file, `ebbwise <version>`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tool_version: Option<String>,
    /// The caution.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub caution: Option<String>,
    /// Mean sea level.
    pub msl: LevelEntry,
    /// Mean high water.
    pub mhw: LevelEntry,
    /// Mean low water.
    pub mlw: LevelEntry,
    /// Mean higher high water.
    pub mhhw: LevelEntry,
    /// Mean lower low water.
    pub mllw: LevelEntry,
    /// Mean tide level.
    pub mtl: LevelEntry,
    /// Diurnal tide level.
    pub dtl: LevelEntry,
    /// Mean range.
    pub mn: RangeEntry,
    /// Great diurnal range.
    pub gt: RangeEntry,
    /// Lowest astronomical tide, when added from harmonic constants.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lat: Option<LevelEntry>,
    /// Highest astronomical tide, when added from harmonic constants.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub hat: Option<LevelEntry>,
    /// Mean level Z0 of harmonic constants, when added.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub z0: Option<LevelEntry>,
}

/// What the file records of the record and how it was read, besides the datums.
#[derive(Debug, Clone, Default)]
pub struct DatumsProvenance {
    /// The record, as given.
    pub source: Option<String>,
    /// The gauge id.
    pub gauge: Option<String>,
    /// Gauge zero above chart datum, metres, when tied; the levels computed are then above
    /// chart datum, else above the gauge zero.
    pub zero_above_datum_m: Option<f64>,
    /// Rows read before QC.
    pub samples_read: Option<usize>,
    /// Whether QC ran.
    pub qc_applied: Option<bool>,
    /// SHA-256 of the record.
    pub record_sha256: Option<String>,
}

/// The method, in words (written in every file).
pub const METHOD: &str = "turning points of the record low-passed (zero-phase) at smoothing_cutoff_min, confirmed by threshold_m each side and min_separation_h apart (closer pairs merged, doubles kept as one); heights from a least-squares parabola through the raw samples within 45 min; higher/lower within tidal days of 24.8412 h; datums over complete tidal days only";

/// The uncertainty model, in words (written in every file).
pub const UNCERTAINTY_MODEL: &str = "standard uncertainty relative to a long record of the same tide: each datum's day series split, by least squares on its autocorrelations at lags of 1 to 4 tidal days, into sinusoids of the fortnight (14.77 d) and the tropical month (27.32 d), each putting the share G = 1/(1 + 2(pi L/P)^2) of its variance into the mean over the record's span L (u^2 = slow variance G/(1 - G)), and white scatter, reduced by sqrt(days); not included: the 18.61-year nodal modulation, seasonal mean-level changes, slower modulations, the gauge zero's own error";

fn level(d: &Datum, zero: Option<f64>) -> LevelEntry {
    // `d` is above chart datum when the zero is tied, else above the gauge zero.
    let (cd, gz) = match zero {
        Some(z) => (Some(d.value_m), d.value_m - z),
        None => (None, d.value_m),
    };
    LevelEntry {
        above_chart_datum_m: cd.map(|v| round_to(v, HEIGHT_DECIMALS)),
        above_gauge_zero_m: round_to(gz, HEIGHT_DECIMALS),
        u_m: round_to(d.u_m, UNCERTAINTY_DECIMALS),
        days: Some(d.days),
        method: None,
    }
}

fn range(d: &Datum) -> RangeEntry {
    RangeEntry {
        range_m: round_to(d.value_m, HEIGHT_DECIMALS),
        u_m: round_to(d.u_m, UNCERTAINTY_DECIMALS),
        days: d.days,
    }
}

impl DatumsFile {
    /// The file for computed datums; levels in `d` are above chart datum when
    /// `p.zero_above_datum_m` is given, else above the gauge zero. Heights and uncertainties to
    /// 0.1 mm, times to the millisecond.
    pub fn new(
        d: &Datums,
        tab: &Tabulation,
        settings: &ExtremaSettings,
        p: DatumsProvenance,
    ) -> DatumsFile {
        let z = p.zero_above_datum_m;
        // Times to the millisecond, the rule of every written time.
        let utc = |t: f64| super::timefmt::utc_time((t * 1000.0).round() / 1000.0);
        DatumsFile {
            format: DATUMS_FORMAT.into(),
            source: p.source,
            gauge: p.gauge,
            zero_above_datum_m: z,
            record_start_utc: utc(tab.span_s.0),
            record_end_utc: utc(tab.span_s.1),
            days_start_utc: utc(d.span_s.0),
            days_end_utc: utc(d.span_s.1),
            samples: tab.samples,
            samples_read: p.samples_read,
            qc_applied: p.qc_applied,
            complete_days: d.complete_days,
            incomplete_days: d.incomplete_days,
            high_waters: d.high_waters,
            low_waters: d.low_waters,
            doubles: d.doubles,
            noise_m: round_to(tab.noise_m, UNCERTAINTY_DECIMALS),
            threshold_m: round_to(tab.threshold_m, HEIGHT_DECIMALS),
            smoothing_cutoff_min: settings.cutoff_min,
            min_separation_h: round_to(settings.min_separation_h, 3),
            method: METHOD.into(),
            uncertainty_model: UNCERTAINTY_MODEL.into(),
            record_sha256: p.record_sha256,
            tool_version: Some(format!("ebbwise {}", env!("CARGO_PKG_VERSION"))),
            caution: Some(crate::CAUTION.into()),
            msl: level(&d.msl, z),
            mhw: level(&d.mhw, z),
            mlw: level(&d.mlw, z),
            mhhw: level(&d.mhhw, z),
            mllw: level(&d.mllw, z),
            mtl: level(&d.mtl, z),
            dtl: level(&d.dtl, z),
            mn: range(&d.mn),
            gt: range(&d.gt),
            lat: None,
            hat: None,
            z0: None,
        }
    }

    /// TOML text.
    pub fn to_toml(&self) -> String {
        let mut s = String::from(
            "# Tidal datums written by ebbwise datums (layout described in docs/datums.md).\n",
        );
        s.push_str(&toml::to_string(self).expect("datums serialise"));
        s
    }

    /// The level datums by name (`MSL`, `MHW`, …, and `LAT`, `HAT`, `Z0` when present).
    pub fn levels(&self) -> Vec<(&'static str, &LevelEntry)> {
        let mut v = vec![
            ("MSL", &self.msl),
            ("MHW", &self.mhw),
            ("MLW", &self.mlw),
            ("MHHW", &self.mhhw),
            ("MLLW", &self.mllw),
            ("MTL", &self.mtl),
            ("DTL", &self.dtl),
        ];
        for (n, e) in [("LAT", &self.lat), ("HAT", &self.hat), ("Z0", &self.z0)] {
            if let Some(e) = e {
                v.push((n, e));
            }
        }
        v
    }
}

/// How LAT and HAT are found, in words (their `method`).
pub const LAT_HAT_METHOD: &str = "extreme of the prediction from the harmonic constants over 18.61 years every 6 minutes, refined in continuous time; u to first order from u(Z0), u(H), u(G) at its instant";

/// How Z0 is found, in words (its `method`).
pub const Z0_METHOD: &str = "Z0 of the harmonic constants (their mean level); u is their u_z0_m";

/// Where the levels of harmonic constants are referred, and the gauge zero's height above chart
/// datum when known.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LevelsReference {
    /// The constants' levels are above chart datum (else above the gauge zero).
    pub above_chart_datum: bool,
    /// Height of the gauge zero above chart datum, metres.
    pub zero_above_datum_m: Option<f64>,
}

/// A level of harmonic constants as a [`LevelEntry`], in both references when the zero is
/// known; `None` when the levels are above chart datum and the zero is not known (no height
/// above the gauge zero can be given).
pub fn harmonic_entry(v: &HarmonicLevel, r: LevelsReference, method: &str) -> Option<LevelEntry> {
    let (cd, gz) = match (r.above_chart_datum, r.zero_above_datum_m) {
        (true, Some(z)) => (Some(v.value_m), v.value_m - z),
        (true, None) => return None,
        (false, z) => (z.map(|z| v.value_m + z), v.value_m),
    };
    Some(LevelEntry {
        above_chart_datum_m: cd.map(|x| round_to(x, HEIGHT_DECIMALS)),
        above_gauge_zero_m: round_to(gz, HEIGHT_DECIMALS),
        u_m: round_to(v.u_m, UNCERTAINTY_DECIMALS),
        days: None,
        method: Some(method.into()),
    })
}

/// Layout name of a file of LAT, HAT and Z0 from harmonic constants alone.
pub const HARMONIC_DATUMS_FORMAT: &str = "ebbwise-harmonic-datums/1";

/// LAT, HAT and Z0 from harmonic constants alone (`ebbwise datums --constants FILE` without a
/// record), TOML, layout [`HARMONIC_DATUMS_FORMAT`].
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct HarmonicDatumsFile {
    /// Layout name.
    pub format: String,
    /// The constants file.
    pub constants: String,
    /// SHA-256 of the constants file, lowercase hex.
    pub constants_sha256: String,
    /// The gauge id, when computed from a project.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub gauge: Option<String>,
    /// Height of the gauge zero above chart datum, metres (absent when not known).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub zero_above_datum_m: Option<f64>,
    /// Start of the prediction, UTC.
    pub prediction_start_utc: String,
    /// Its span, Julian years.
    pub prediction_years: f64,
    /// Its step, minutes.
    pub prediction_step_min: f64,
    /// When LAT occurs, UTC.
    pub lat_at_utc: String,
    /// When HAT occurs, UTC.
    pub hat_at_utc: String,
    /// Why the constants may not stand for the place.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
    /// The program that wrote the file.
    pub tool_version: String,
    /// The caution.
    pub caution: String,
    /// Lowest astronomical tide.
    pub lat: LevelEntry,
    /// Highest astronomical tide.
    pub hat: LevelEntry,
    /// The constants' mean level.
    pub z0: LevelEntry,
}

impl HarmonicDatumsFile {
    /// TOML text.
    pub fn to_toml(&self) -> String {
        let mut s = String::from(
            "# LAT, HAT and Z0 from harmonic constants, written by ebbwise datums (layout described in docs/datums.md).\n",
        );
        s.push_str(&toml::to_string(self).expect("harmonic datums serialise"));
        s
    }
}

/// Reads a datums file, checking its layout name and that its uncertainties are not negative.
pub fn read_datums(path: &Path) -> Result<DatumsFile, IoError> {
    let text = std::fs::read_to_string(path).map_err(|e| IoError::file(path, e))?;
    let file: DatumsFile =
        toml::from_str(&text).map_err(|e| IoError::from_toml(&e, &text, path))?;
    if file.format != DATUMS_FORMAT {
        return Err(IoError::content(
            Position::file(path).field("format"),
            format!("expected '{DATUMS_FORMAT}', found '{}'", file.format),
        ));
    }
    let ranges = [("mn", file.mn.u_m), ("gt", file.gt.u_m)];
    let names = [
        "msl", "mhw", "mlw", "mhhw", "mllw", "mtl", "dtl", "lat", "hat", "z0",
    ];
    let levels = [
        Some(&file.msl),
        Some(&file.mhw),
        Some(&file.mlw),
        Some(&file.mhhw),
        Some(&file.mllw),
        Some(&file.mtl),
        Some(&file.dtl),
        file.lat.as_ref(),
        file.hat.as_ref(),
        file.z0.as_ref(),
    ];
    for (name, u) in names
        .iter()
        .zip(levels)
        .filter_map(|(n, e)| e.map(|e| (*n, e.u_m)))
        .chain(ranges)
    {
        if !(u.is_finite() && u >= 0.0) {
            return Err(IoError::content(
                Position::file(path).field(format!("{name}.u_m")),
                format!("expected a standard uncertainty ≥ 0, found {u}"),
            ));
        }
    }
    Ok(file)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::datums::datums;
    use crate::compute::extrema::tabulate;

    /// Written and read back equal; the gauge-zero height is the chart-datum height minus the
    /// zero's height above chart datum (the definition of the two references).
    #[test]
    fn round_trip_and_references() {
        let w = 28.984_104_2_f64.to_radians() / 3600.0;
        let t: Vec<f64> = (0..6 * 240).map(|i| 1.78e9 + 360.0 * i as f64).collect();
        let y: Vec<f64> = t.iter().map(|&x| 2.0 + (w * x).cos()).collect();
        let s = ExtremaSettings::default();
        let tab = tabulate(&t, &y, &s).unwrap();
        let d = datums(&tab).unwrap();
        let f = DatumsFile::new(
            &d,
            &tab,
            &s,
            DatumsProvenance {
                zero_above_datum_m: Some(-1.25),
                gauge: Some("g1".into()),
                ..Default::default()
            },
        );
        let mhw = f.mhw.above_chart_datum_m.unwrap();
        assert!((mhw - 3.0).abs() < 2e-4);
        assert!((f.mhw.above_gauge_zero_m - (mhw + 1.25)).abs() < 1e-9);
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("g.datums.toml");
        std::fs::write(&p, f.to_toml()).unwrap();
        assert_eq!(read_datums(&p).unwrap(), f);
        // A LAT entry (to be added from constants) reads; a wrong layout name is refused.
        let text = f.to_toml() + "\n[lat]\nabove_chart_datum_m = 0.0\nabove_gauge_zero_m = 1.25\nu_m = 0.05\nmethod = \"19-year prediction\"\n";
        std::fs::write(&p, text).unwrap();
        assert!(read_datums(&p).unwrap().lat.is_some());
        std::fs::write(&p, f.to_toml().replace(DATUMS_FORMAT, "other/1")).unwrap();
        let e = read_datums(&p).unwrap_err().to_string();
        assert!(e.contains("field 'format'"), "{e}");
    }
}
