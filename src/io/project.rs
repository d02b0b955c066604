//! The project file (TOML): what a run reads and how. Paths are relative to the project file.
//!
//! The annotated reference is `docs/project-file.md`; the demo's `zoning-demo/project.toml` is a
//! complete example. Unknown keys are errors, so a misspelt key is never silently ignored.

use std::path::{Path, PathBuf};

use chrono::FixedOffset;
use serde::Deserialize;

use super::error::{IoError, Position};
use super::timefmt::{parse_offset, TimeFormat};

/// The project file as written.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct ProjectFile {
    /// A name for reports.
    pub name: String,
    /// The zoning, GeoJSON (RFC 7946: WGS 84 longitude/latitude).
    pub zoning: PathBuf,
    /// How to read times written without a UTC offset, e.g. `"+01:00"`. Absent: such times are
    /// errors.
    #[serde(default)]
    pub naive_time_utc_offset: Option<String>,
    /// Output options.
    #[serde(default)]
    pub output: OutputSpec,
    /// The tide gauges.
    #[serde(rename = "gauge", default)]
    pub gauges: Vec<GaugeSpec>,
    /// Groups of sounding files sharing one layout.
    #[serde(rename = "soundings", default)]
    pub soundings: Vec<SoundingsSpec>,
    /// Uncertainty inputs and the survey order; absent: no uncertainty is computed.
    #[serde(default)]
    pub uncertainty: Option<UncertaintySpec>,
    /// Gauge-record quality control (on by default).
    #[serde(default)]
    pub qc: QcSpec,
    /// Time interpolation of gauge records.
    #[serde(default)]
    pub interpolation: InterpolationSpec,
    /// Filling gauge gaps (off by default).
    #[serde(default)]
    pub gap_fill: GapFillSpec,
    /// Virtual gauges: harmonic constants at a point without a record (e.g. from an offshore
    /// tide model the authority supplies), which control the co-tidal fields where no gauge
    /// stands (docs/cotidal.md).
    #[serde(rename = "virtual_gauge", default)]
    pub virtual_gauges: Vec<VirtualGaugeSpec>,
    /// Reduce with a continuous tide between gauges instead of the zones' correctors
    /// (docs/cotidal.md); absent: the zoning's correctors.
    #[serde(default)]
    pub tide_field: Option<TideFieldSpec>,
}

/// `[tide_field]`: a continuous tide carried between the gauges by the co-tidal field of their
/// harmonic constants and the virtual gauges (`compute::continuous`). The zoning still bounds
/// the survey area and names the reporting zones. The uncertainty keys are standard
/// uncertainties; the defaults are **demo values** (typical magnitudes, not authority-approved
/// numbers).
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct TideFieldSpec {
    /// `corrector_field` or `astronomical_residual`.
    pub mode: TideFieldMode,
    /// The field's departure from linear at the midpoint of two stations `field_scale_km`
    /// apart, metres (demo default 0.05).
    #[serde(default)]
    pub u_field_m: Option<f64>,
    /// The distance `u_field_m` refers to, kilometres (demo default 10).
    #[serde(default)]
    pub field_scale_km: Option<f64>,
    /// A station's relative amplitude error (demo default 0.02).
    #[serde(default)]
    pub u_station_range_ratio: Option<f64>,
    /// A station's phase error, minutes of the dominant constituent (demo default 3).
    #[serde(default)]
    pub u_station_time_min: Option<f64>,
}

/// The continuous methods, as written in `[tide_field] mode`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum TideFieldMode {
    /// Time corrector and range ratio fields from every gauge, blended.
    CorrectorField,
    /// Prediction from the interpolated constants plus the gauges' residuals, blended.
    AstronomicalResidual,
}

/// `[tide_field] u_field_m` when not given, metres (demo value).
pub const DEFAULT_U_FIELD_M: f64 = 0.05;
/// `[tide_field] field_scale_km` when not given (demo value).
pub const DEFAULT_FIELD_SCALE_KM: f64 = 10.0;
/// `[tide_field] u_station_range_ratio` when not given (demo value).
pub const DEFAULT_U_STATION_RANGE_RATIO: f64 = 0.02;
/// `[tide_field] u_station_time_min` when not given (demo value).
pub const DEFAULT_U_STATION_TIME_MIN: f64 = 3.0;
/// Longest `[tide_field] field_scale_km` accepted: a tide field drawn from stations more than
/// 1000 km apart is not a survey area's.
pub const FIELD_SCALE_REFUSED_ABOVE_KM: f64 = 1000.0;

/// `[[virtual_gauge]]`: harmonic constants at a point, for the co-tidal fields.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct VirtualGaugeSpec {
    /// Identifier (unique among gauges and virtual gauges).
    pub id: String,
    /// A name for reports.
    #[serde(default)]
    pub name: Option<String>,
    /// Longitude, degrees east (WGS 84).
    pub lon: f64,
    /// Latitude, degrees north (WGS 84).
    pub lat: f64,
    /// Its constants file (`ebbwise-harmonic-constants/1`, levels above chart datum).
    pub constants: PathBuf,
}

/// `[gap_fill]`: filling gaps in gauge records from a prediction or a neighbouring gauge, and
/// renormalising the weights of a zone whose feed has no level. Off by default: without it a
/// sounding in a gap has no tide (docs/gap-filling.md).
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct GapFillSpec {
    /// Fill gaps (default false).
    pub enabled: bool,
    /// Longest gap filled, minutes, between the usable samples around it (default 180); longer
    /// gaps stay open.
    pub max_fill_min: f64,
    /// Window of observed samples on each side of a gap whose mean mismatch with the reference
    /// sets the fill's offsets, minutes (default 30).
    pub edge_window_min: f64,
    /// Method for every gauge not named in `methods` (default auto).
    pub method: GapFillChoice,
    /// Method per gauge id.
    pub methods: std::collections::BTreeMap<String, GapFillChoice>,
    /// A zone fed by several gauges, one without a level: use the others with their weights
    /// renormalised (default false).
    pub renormalise_feeds: bool,
}

impl Default for GapFillSpec {
    fn default() -> Self {
        GapFillSpec {
            enabled: false,
            max_fill_min: 180.0,
            edge_window_min: 30.0,
            method: GapFillChoice::Auto,
            methods: Default::default(),
            renormalise_feeds: false,
        }
    }
}

impl GapFillSpec {
    /// The method for gauge `id`.
    pub fn method_for(&self, id: &str) -> GapFillChoice {
        self.methods.get(id).copied().unwrap_or(self.method)
    }
}

/// How a gauge's gaps are filled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize, Default)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum GapFillChoice {
    /// Of the gauge's references (its constants, its neighbours), the one that best matches
    /// the gap's edges.
    #[default]
    Auto,
    /// Its harmonic prediction plus the residual interpolated across the gap (needs
    /// `constants`).
    PredictionResidual,
    /// A neighbouring gauge through the zoning's correctors.
    Neighbour,
    /// Never filled.
    None,
}

impl GapFillChoice {
    /// The word written in the project file.
    pub fn as_str(self) -> &'static str {
        match self {
            GapFillChoice::Auto => "auto",
            GapFillChoice::PredictionResidual => "prediction_residual",
            GapFillChoice::Neighbour => "neighbour",
            GapFillChoice::None => "none",
        }
    }
}

/// Longest `[gap_fill] max_fill_min` accepted, minutes: a day. A fill that long rests on the
/// reference alone, and its error can no longer be measured on a record of a few days.
pub const MAX_FILL_REFUSED_ABOVE_MIN: f64 = 1440.0;

/// Longest `[gap_fill] edge_window_min` accepted, minutes: 3 h, a quarter of a semidiurnal
/// tide; a longer window averages mismatches over a part of the tide no longer near the gap.
pub const EDGE_WINDOW_REFUSED_ABOVE_MIN: f64 = 180.0;

/// The line of `key` in the `[table]` table of `text` (1-based), or of the table's header.
fn table_key_line(text: &str, table: &str, key: &str) -> Option<u64> {
    let mut header = None;
    let (open, sub) = (format!("[{table}]"), format!("[{table}."));
    for (n, line) in text.lines().enumerate() {
        let l = line.trim_start();
        if l.starts_with('[') {
            if header.is_some() && !(l.starts_with(&open) || l.starts_with(&sub)) {
                break;
            }
            if l.starts_with(&open) || l.starts_with(&sub) {
                header = header.or(Some(n as u64 + 1));
            }
            continue;
        }
        if header.is_some() {
            let code = l.split('#').next().unwrap_or("");
            let found = code.starts_with(key) && code[key.len()..].trim_start().starts_with('=')
                || code.contains(&format!("{key} ="))
                || code.contains(&format!("{key}="))
                || code.contains(&format!("\"{key}\""));
            if found {
                return Some(n as u64 + 1);
            }
        }
    }
    header
}

/// Every problem of the `[gap_fill]` table, positioned at its line in `text`.
fn validate_gap_fill(spec: &ProjectFile, text: &str, path: &Path, errors: &mut Vec<IoError>) {
    let g = &spec.gap_fill;
    let mut err = |key: &str, m: String| {
        let mut at = Position::file(path).field(format!("gap_fill.{key}"));
        let last = key.rsplit('.').next().unwrap_or(key);
        if let Some(l) = table_key_line(text, "gap_fill", last) {
            at = at.line(l);
        }
        errors.push(IoError::content(at, m));
    };
    for (k, v, max, why) in [
        (
            "max_fill_min",
            g.max_fill_min,
            MAX_FILL_REFUSED_ABOVE_MIN,
            "a longer fill rests on the reference alone",
        ),
        (
            "edge_window_min",
            g.edge_window_min,
            EDGE_WINDOW_REFUSED_ABOVE_MIN,
            "a longer window averages over a part of the tide away from the gap",
        ),
    ] {
        if !(v.is_finite() && v > 0.0) {
            err(
                k,
                format!("expected a positive number of minutes, found {v}"),
            );
        } else if v > max {
            err(
                k,
                format!("{v} min is beyond the plausible {max} min: {why}"),
            );
        }
    }
    let ids: Vec<&str> = spec.gauges.iter().map(|g| g.id.as_str()).collect();
    for id in g.methods.keys() {
        if !ids.contains(&id.as_str()) {
            err(
                &format!("methods.{id}"),
                format!(
                    "names gauge '{id}', which the project does not define{}",
                    crate::compute::names::hint(id, ids.iter().copied())
                ),
            );
        }
    }
    for gauge in &spec.gauges {
        let (m, key) = match g.methods.get(&gauge.id) {
            Some(m) => (*m, format!("methods.{}", gauge.id)),
            None => (g.method, "method".to_string()),
        };
        if m == GapFillChoice::PredictionResidual && gauge.constants.is_none() {
            err(
                &key,
                format!(
                    "gauge '{}' has no `constants` file: filling by prediction_residual needs the gauge's harmonic constants (write them with `ebbwise analyse` and set the gauge's `constants`), or choose auto or neighbour",
                    gauge.id
                ),
            );
        }
    }
}

/// Every problem of the `[tide_field]` table, positioned at its line in `text`.
fn validate_tide_field(spec: &ProjectFile, text: &str, path: &Path, errors: &mut Vec<IoError>) {
    use crate::compute::uncertainty::{
        U_HEIGHT_REFUSED_ABOVE_M, U_RANGE_RATIO_REFUSED_ABOVE, U_TIME_CORRECTOR_REFUSED_ABOVE_MIN,
    };
    let Some(f) = &spec.tide_field else {
        return;
    };
    let mut err = |key: &str, m: String| {
        let mut at = Position::file(path).field(format!("tide_field.{key}"));
        if let Some(l) = table_key_line(text, "tide_field", key) {
            at = at.line(l);
        }
        errors.push(IoError::content(at, m));
    };
    for (k, v, max, unit) in [
        ("u_field_m", f.u_field_m, U_HEIGHT_REFUSED_ABOVE_M, " m"),
        (
            "u_station_range_ratio",
            f.u_station_range_ratio,
            U_RANGE_RATIO_REFUSED_ABOVE,
            "",
        ),
        (
            "u_station_time_min",
            f.u_station_time_min,
            U_TIME_CORRECTOR_REFUSED_ABOVE_MIN,
            " min",
        ),
    ] {
        let Some(v) = v else { continue };
        if !(v.is_finite() && v >= 0.0) {
            err(k, format!("expected a standard uncertainty ≥ 0, found {v}"));
        } else if v > max {
            err(
                k,
                format!("standard uncertainty {v}{unit} is beyond the plausible {max}{unit}"),
            );
        }
    }
    if let Some(v) = f.field_scale_km {
        if !(v.is_finite() && v > 0.0) {
            err(
                "field_scale_km",
                format!("expected a positive distance in kilometres, found {v}"),
            );
        } else if v > FIELD_SCALE_REFUSED_ABOVE_KM {
            err(
                "field_scale_km",
                format!(
                    "{v} km is beyond the plausible {FIELD_SCALE_REFUSED_ABOVE_KM} km (metres written as kilometres?)"
                ),
            );
        }
    }
    let with_constants = spec.gauges.iter().filter(|g| g.constants.is_some()).count();
    if with_constants == 0 {
        err(
            "mode",
            "a continuous tide needs gauges with harmonic constants: no gauge names a `constants` file (write them with `ebbwise analyse`)".into(),
        );
    }
    if with_constants + spec.virtual_gauges.len() < 3 {
        err(
            "mode",
            format!(
                "a co-tidal field needs at least three stations (gauges with `constants` and [[virtual_gauge]] tables); the project has {}",
                with_constants + spec.virtual_gauges.len()
            ),
        );
    }
}

/// `[qc]`: gauge-record quality control. The reducer does not interpolate through a flagged
/// sample. Defaults: see `compute::qc::QcThresholds` (from memory / common practice, documented in
/// docs/qc.md).
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct QcSpec {
    /// Run QC when loading gauges for `reduce`, `check`, `correctors` (default true).
    pub enabled: bool,
    /// What a time written twice in a gauge record with different readings does (default
    /// refuse). Applies with QC off too.
    pub duplicate_time_conflict: DuplicateTimeConflict,
    /// Gap threshold in nominal steps.
    pub gap_factor: f64,
    /// Spike test window, minutes.
    pub spike_window_min: f64,
    /// Spike threshold, robust standard deviations.
    pub spike_k: f64,
    /// Smallest spike, metres.
    pub spike_min_m: f64,
    /// Fastest plausible rate, metres per hour (absent: derived from each record, see
    /// `compute::qc::QcLimits`).
    pub max_rate_m_per_h: Option<f64>,
    /// Noise allowance of the rate test, metres.
    pub rate_allowance_m: f64,
    /// Fewest repeated readings that make a flat line (absent: 5, and stands excused).
    pub flat_min_samples: Option<usize>,
    /// Shortest flat line, minutes (absent: 60, and stands excused).
    pub flat_min_duration_min: Option<f64>,
    /// Level-shift fit window each side, minutes.
    pub shift_window_min: f64,
    /// Level-shift threshold, robust standard deviations.
    pub shift_k: f64,
    /// Smallest level shift, metres.
    pub shift_min_m: f64,
    /// A level shift sets aside the record after it (until a step back or the record's end),
    /// not only its first sample (default true).
    pub shift_sets_aside_after: bool,
    /// Plausible band half-width around each gauge's mean level, metres (default 10), unless the
    /// gauge gives `band_min_m` / `band_max_m`.
    pub band_half_width_m: f64,
    /// Gauge comparison: largest acceptable |mean difference|, metres (default 0.05).
    pub compare_max_mean_m: f64,
    /// Gauge comparison: largest acceptable |drift|, metres per day (default 0.02).
    pub compare_max_drift_m_per_day: f64,
    /// Gauge comparison: largest acceptable timing offset, minutes (default 10).
    pub compare_max_lag_min: f64,
    /// Gauge comparison: lags searched, ± minutes (default 90).
    pub compare_lag_search_min: f64,
    /// Gauge comparison: step-search window each side, minutes (default 180).
    pub compare_shift_window_min: f64,
    /// Boundary tests: local tidal model window each side of a hole, minutes (default 360).
    pub boundary_window_min: f64,
    /// Boundary tests: step threshold, standard errors (default 6).
    pub boundary_shift_k: f64,
    /// Boundary tests: smallest lag called a clock jump, minutes (default 10).
    pub lag_min_min: f64,
    /// Boundary tests: lag acceptance margin, √(residual variances) (default 4).
    pub lag_k: f64,
    /// Gauge comparison: moving-window drift, window length in days (default 4).
    pub compare_drift_window_days: f64,
    /// Gauge comparison: largest acceptable drift within a window, metres per day (default
    /// 0.005).
    pub compare_max_window_drift_m_per_day: f64,
}

/// What to do with a gauge-record time written twice with different readings: no rule can tell
/// which reading is right.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Deserialize, serde::Serialize)]
#[non_exhaustive]
pub enum DuplicateTimeConflict {
    /// The record is refused: an error names the file and both lines (the default).
    #[default]
    #[serde(rename = "refuse")]
    Refuse,
    /// Both copies are set aside (`duplicate_time`) and the run goes on; the time is then
    /// bridged like a missing reading, within the gauge's `max_gap_min`.
    #[serde(rename = "set_both_aside")]
    SetBothAside,
}

impl Default for QcSpec {
    fn default() -> Self {
        let t = crate::compute::qc::QcThresholds::default();
        QcSpec {
            enabled: true,
            duplicate_time_conflict: DuplicateTimeConflict::Refuse,
            gap_factor: t.gap_factor,
            spike_window_min: t.spike_window_min,
            spike_k: t.spike_k,
            spike_min_m: t.spike_min_m,
            max_rate_m_per_h: t.max_rate_m_per_h,
            rate_allowance_m: t.rate_allowance_m,
            flat_min_samples: t.flat_min_samples,
            flat_min_duration_min: t.flat_min_duration_min,
            shift_window_min: t.shift_window_min,
            shift_k: t.shift_k,
            shift_min_m: t.shift_min_m,
            shift_sets_aside_after: t.shift_sets_aside_after,
            band_half_width_m: 10.0,
            compare_max_mean_m: 0.05,
            compare_max_drift_m_per_day: 0.02,
            compare_max_lag_min: 10.0,
            compare_lag_search_min: 90.0,
            compare_shift_window_min: 180.0,
            boundary_window_min: t.boundary_window_min,
            boundary_shift_k: t.boundary_shift_k,
            lag_min_min: t.lag_min_min,
            lag_k: t.lag_k,
            compare_drift_window_days: crate::compute::compare::CompareSettings::DRIFT_WINDOW_DAYS,
            compare_max_window_drift_m_per_day:
                crate::compute::compare::CompareSettings::MAX_WINDOW_DRIFT_M_PER_DAY,
        }
    }
}

impl QcSpec {
    /// Thresholds for one gauge (band from the gauge's own limits or its mean level).
    pub fn thresholds_for(&self, g: &GaugeSpec) -> crate::compute::qc::QcThresholds {
        crate::compute::qc::QcThresholds {
            gap_factor: self.gap_factor,
            spike_window_min: self.spike_window_min,
            spike_k: self.spike_k,
            spike_min_m: self.spike_min_m,
            max_rate_m_per_h: self.max_rate_m_per_h,
            rate_allowance_m: self.rate_allowance_m,
            flat_min_samples: self.flat_min_samples,
            flat_min_duration_min: self.flat_min_duration_min,
            shift_window_min: self.shift_window_min,
            shift_k: self.shift_k,
            shift_min_m: self.shift_min_m,
            shift_sets_aside_after: self.shift_sets_aside_after,
            band_min_m: g
                .band_min_m
                .unwrap_or(g.mean_level_above_datum_m - self.band_half_width_m),
            band_max_m: g
                .band_max_m
                .unwrap_or(g.mean_level_above_datum_m + self.band_half_width_m),
            boundary_window_min: self.boundary_window_min,
            boundary_shift_k: self.boundary_shift_k,
            lag_min_min: self.lag_min_min,
            lag_k: self.lag_k,
        }
    }
}

/// Largest plausible |`zero_above_datum_m`| and |`mean_level_above_datum_m`| of a gauge,
/// metres. Chart datum lies near the lowest tide, so a mean level sits at most about half the
/// largest tidal range (some 16 m) above it, and a gauge zero within metres of it; 100 m leaves
/// room for any datum choice while refusing a value typed in millimetres or centimetres (common
/// practice; the 16 m range from memory).
pub const GAUGE_LEVEL_LIMIT_M: f64 = 100.0;

/// `[interpolation]`: how gauge records are interpolated in time.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct InterpolationSpec {
    /// With `interpolation = "auto"` (the default per gauge), records whose nominal step is
    /// longer than this many minutes use a not-a-knot cubic spline, others linear (default 10).
    pub cubic_above_step_min: f64,
}

impl Default for InterpolationSpec {
    fn default() -> Self {
        InterpolationSpec {
            cubic_above_step_min: 10.0,
        }
    }
}

/// A gauge's time interpolation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize, Default)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum InterpolationChoice {
    /// Linear for records stepping `cubic_above_step_min` or less, not-a-knot cubic spline above.
    #[default]
    Auto,
    /// Always linear.
    Linear,
    /// Always a not-a-knot cubic spline.
    Cubic,
}

/// Uncertainty inputs (all standard uncertainties, 1σ) and the survey order to judge against.
///
/// The `default_*` values apply to gauges and zones that do not give their own. Their built-in
/// defaults are **demo values** (typical magnitudes, not authority-approved numbers): replace them
/// with the values of your survey specification.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct UncertaintySpec {
    /// Survey order judged per sounding: `exclusive`, `special`, `1a`, `1b`, `2` (IHO S-44
    /// Edition 6.1.0) or the name of a `custom_order`.
    #[serde(default = "default_order")]
    pub order: String,
    /// Share of soundings that must be within an order's limit for the survey to meet it.
    #[serde(default = "default_acceptance")]
    pub acceptance_share: f64,
    /// Sounding uncertainty model `u = sqrt(a² + (b·d)²)`: `a`, metres (standard). Used when the
    /// soundings have no `u_depth` column.
    #[serde(default = "default_sounding_a")]
    pub sounding_a_m: f64,
    /// Sounding uncertainty model: `b` (standard, dimensionless).
    #[serde(default = "default_sounding_b")]
    pub sounding_b: f64,
    /// Gauge sensor + interpolation standard uncertainty, metres (demo default 0.015).
    #[serde(default = "default_u_gauge")]
    pub default_u_gauge_m: f64,
    /// Chart-datum standard uncertainty carried by a gauge, metres (demo default 0.04).
    #[serde(default = "default_u_datum")]
    pub default_u_datum_m: f64,
    /// Time corrector standard uncertainty, minutes (demo default 10).
    #[serde(default = "default_u_dt")]
    pub default_u_time_corrector_min: f64,
    /// Range ratio standard uncertainty (demo default 0.03).
    #[serde(default = "default_u_r")]
    pub default_u_range_ratio: f64,
    /// Spatial (zone) standard uncertainty, metres (demo default 0.10).
    #[serde(default = "default_u_zone")]
    pub default_u_zone_m: f64,
    /// User-defined orders.
    #[serde(default, rename = "custom_order")]
    pub custom_orders: Vec<CustomOrderSpec>,
}

/// A user-defined survey order: allowed TVU at 95 % `sqrt(a² + (b·d)²)`.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct CustomOrderSpec {
    /// Name.
    pub name: String,
    /// `a`, metres (95 %).
    pub a_m: f64,
    /// `b` (95 %).
    pub b: f64,
}

fn default_order() -> String {
    "1a".into()
}
fn default_acceptance() -> f64 {
    0.95
}
fn default_sounding_a() -> f64 {
    0.05
}
fn default_sounding_b() -> f64 {
    0.005
}
fn default_u_gauge() -> f64 {
    0.015
}
fn default_u_datum() -> f64 {
    0.04
}
fn default_u_dt() -> f64 {
    10.0
}
fn default_u_r() -> f64 {
    0.03
}
fn default_u_zone() -> f64 {
    0.10
}

/// Where and how results are written.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct OutputSpec {
    /// Output directory, relative to the project file (created when missing).
    #[serde(default = "default_out_dir")]
    pub dir: PathBuf,
    /// Write the failing and the unreduced soundings as GeoJSON beside the QA report (default
    /// true). A day of multibeam with many failing soundings makes large files; a pipeline that
    /// reads `within_order` from the reduced files can turn them off.
    #[serde(default = "yes")]
    pub geojson_exports: bool,
    /// Format of the per-sounding outputs (reduced, applied): `csv` (default) or `parquet`.
    /// The command line's `--format` overrides it for one run.
    #[serde(default)]
    pub format: TableFormat,
}

/// Format of a per-sounding table ebbwise writes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Deserialize, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum TableFormat {
    /// Comma-separated text, one line per sounding.
    #[default]
    Csv,
    /// Apache Parquet: typed columns, compressed.
    Parquet,
}

impl TableFormat {
    /// The file name extension (without the dot).
    pub fn extension(self) -> &'static str {
        match self {
            TableFormat::Csv => "csv",
            TableFormat::Parquet => "parquet",
        }
    }

    /// Reads `csv` or `parquet`.
    pub fn parse(s: &str) -> Option<Self> {
        match s {
            "csv" => Some(TableFormat::Csv),
            "parquet" => Some(TableFormat::Parquet),
            _ => None,
        }
    }
}

fn yes() -> bool {
    true
}

impl Default for OutputSpec {
    fn default() -> Self {
        OutputSpec {
            dir: default_out_dir(),
            geojson_exports: true,
            format: TableFormat::Csv,
        }
    }
}

fn default_out_dir() -> PathBuf {
    PathBuf::from("out")
}

/// Units of a gauge record's heights.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[non_exhaustive]
pub enum HeightUnit {
    /// Metres.
    #[serde(rename = "m")]
    Metre,
    /// International foot, 0.3048 m exactly.
    #[serde(rename = "ft")]
    Foot,
    /// US survey foot, 1200/3937 m.
    #[serde(rename = "us_ft")]
    UsSurveyFoot,
}

impl HeightUnit {
    /// The word written in a project file and in a constants file's `input_units`.
    pub fn as_str(self) -> &'static str {
        match self {
            HeightUnit::Metre => "m",
            HeightUnit::Foot => "ft",
            HeightUnit::UsSurveyFoot => "us_ft",
        }
    }

    /// Metres per unit.
    ///
    /// # References
    /// International foot 0.3048 m (1959 agreement); US survey foot 1200/3937 m.
    pub fn metres_per_unit(self) -> f64 {
        match self {
            HeightUnit::Metre => 1.0,
            HeightUnit::Foot => 0.3048,
            HeightUnit::UsSurveyFoot => 1200.0 / 3937.0,
        }
    }
}

/// One tide gauge.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct GaugeSpec {
    /// Identifier used by the zoning.
    pub id: String,
    /// A name for reports.
    #[serde(default)]
    pub name: Option<String>,
    /// Longitude, degrees east (WGS 84).
    pub lon: f64,
    /// Latitude, degrees north (WGS 84).
    pub lat: f64,
    /// The water-level record (CSV).
    pub record: PathBuf,
    /// Units of the record's heights.
    pub units: HeightUnit,
    /// Height of the gauge zero above chart datum, metres (negative when the zero is below chart
    /// datum). Level above chart datum = reading (in metres) + this.
    pub zero_above_datum_m: f64,
    /// Mean water level at the gauge above chart datum `M_g`, metres.
    pub mean_level_above_datum_m: f64,
    /// Longest gap between samples that interpolation may bridge, minutes.
    #[serde(default = "default_max_gap_min")]
    pub max_gap_min: f64,
    /// Name of the time column.
    #[serde(default = "default_time_column")]
    pub time_column: String,
    /// Name of the height column.
    #[serde(default = "default_height_column")]
    pub height_column: String,
    /// Optional quality-flag column; rows whose flag is not in `good_flags` are skipped and
    /// counted.
    #[serde(default)]
    pub flag_column: Option<String>,
    /// Flag values that mark a usable sample.
    #[serde(default = "default_good_flags")]
    pub good_flags: Vec<String>,
    /// Height values meaning "no reading" (an empty field always does).
    #[serde(default)]
    pub null_values: Vec<String>,
    /// Offset for naive times in this record; defaults to the project's.
    #[serde(default)]
    pub naive_time_utc_offset: Option<String>,
    /// Sensor + interpolation standard uncertainty of the level, metres (default: the
    /// project's `[uncertainty] default_u_gauge_m`).
    #[serde(default)]
    pub u_gauge_m: Option<f64>,
    /// Standard uncertainty of chart datum as carried by this gauge, metres (default: the
    /// project's `[uncertainty] default_u_datum_m`).
    #[serde(default)]
    pub u_datum_m: Option<f64>,
    /// Time interpolation: `auto` (default), `linear` or `cubic`.
    #[serde(default)]
    pub interpolation: InterpolationChoice,
    /// Zero-phase low-pass filter cut-off period, minutes (absent: no filter).
    #[serde(default)]
    pub lowpass_cutoff_min: Option<f64>,
    /// Lowest plausible level above chart datum, metres (default: mean level − `[qc]
    /// band_half_width_m`).
    #[serde(default)]
    pub band_min_m: Option<f64>,
    /// Highest plausible level above chart datum, metres (default: mean level + `[qc]
    /// band_half_width_m`).
    #[serde(default)]
    pub band_max_m: Option<f64>,
    /// Harmonic constants of this gauge (a file written by `ebbwise analyse`, levels above chart
    /// datum): checked when the project loads; `ebbwise predict --project --gauge` uses them.
    #[serde(default)]
    pub constants: Option<PathBuf>,
    /// Tidal datums of this gauge (a file written by `ebbwise datums`), path relative to the
    /// project file: read and checked when the project loads (layout, gauge id); `ebbwise check`
    /// warns when `zero_above_datum_m` or `mean_level_above_datum_m` disagrees with it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub datums: Option<PathBuf>,
}

impl GaugeSpec {
    /// A gauge for one record read outside a project (`ebbwise qc --record`): default columns and
    /// limits; mean level 0 until the caller sets it.
    pub fn for_record(record: &Path, units: HeightUnit, zero_above_datum_m: f64) -> GaugeSpec {
        GaugeSpec {
            id: record
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_else(|| "record".into()),
            name: None,
            lon: 0.0,
            lat: 0.0,
            record: record.to_path_buf(),
            units,
            zero_above_datum_m,
            mean_level_above_datum_m: 0.0,
            max_gap_min: default_max_gap_min(),
            time_column: default_time_column(),
            height_column: default_height_column(),
            flag_column: None,
            good_flags: default_good_flags(),
            null_values: Vec::new(),
            naive_time_utc_offset: None,
            u_gauge_m: None,
            u_datum_m: None,
            interpolation: InterpolationChoice::Auto,
            lowpass_cutoff_min: None,
            band_min_m: None,
            band_max_m: None,
            constants: None,
            datums: None,
        }
    }
}

/// `max_gap_min` of a gauge that does not set it, minutes.
pub const DEFAULT_MAX_GAP_MIN: f64 = 30.0;

fn default_max_gap_min() -> f64 {
    DEFAULT_MAX_GAP_MIN
}
fn default_time_column() -> String {
    "time".into()
}
fn default_height_column() -> String {
    "height".into()
}
fn default_good_flags() -> Vec<String> {
    vec!["0".into(), "good".into()]
}

/// Field separator of a soundings file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum Delimiter {
    /// `,`
    Comma,
    /// `;`
    Semicolon,
    /// A tab.
    Tab,
    /// Runs of spaces or tabs.
    Whitespace,
}

/// Sign convention of a depth column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DepthSign {
    /// Depths positive down (the usual).
    PositiveDown,
    /// Heights positive up (depths written negative): negated on reading.
    PositiveUp,
}

/// Which columns hold what. Each value is a header name, or `#N` for the N-th column (1-based).
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct ColumnMap {
    /// Time of the sounding.
    pub time: String,
    /// Easting, or longitude in degrees, in the group's CRS.
    pub x: String,
    /// Northing, or latitude in degrees, in the group's CRS.
    pub y: String,
    /// Observed depth below the water surface, metres.
    pub depth: String,
    /// Survey line identifier (optional).
    #[serde(default)]
    pub line: Option<String>,
    /// Per-sounding standard uncertainty of the depth, metres (optional).
    #[serde(default)]
    pub u_depth: Option<String>,
}

/// A group of sounding files with one layout.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct SoundingsSpec {
    /// The files.
    pub files: Vec<PathBuf>,
    /// CRS of the positions, e.g. `"EPSG:32629"` or `"EPSG:4326"` (x = longitude, y = latitude).
    pub crs: String,
    /// Field separator.
    #[serde(default = "default_delimiter")]
    pub delimiter: Delimiter,
    /// Whether the first line is a header.
    #[serde(default = "default_true")]
    pub header: bool,
    /// How times are written.
    #[serde(default = "default_time_format")]
    pub time_format: TimeFormat,
    /// Depth sign convention.
    #[serde(default = "default_depth_sign")]
    pub depth_sign: DepthSign,
    /// Whether rows may have more fields than the header (`"refused"` by default: such a row is
    /// `bad_input`, since a split field, e.g. an unquoted `1,015.65`, shifts the columns).
    #[serde(default)]
    pub extra_trailing_fields: ExtraFields,
    /// Column mapping.
    pub columns: ColumnMap,
}

/// What a soundings row with more fields than the header is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Deserialize, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ExtraFields {
    /// The row is `bad_input` (the default).
    #[default]
    Refused,
    /// Fields after the header's last column are expected: ignored, and noted in the row.
    Allowed,
}

fn default_delimiter() -> Delimiter {
    Delimiter::Comma
}
fn default_true() -> bool {
    true
}
fn default_time_format() -> TimeFormat {
    TimeFormat::Iso8601
}
fn default_depth_sign() -> DepthSign {
    DepthSign::PositiveDown
}

/// A project file read and checked, with paths resolved against its folder.
#[derive(Debug, Clone)]
pub struct Project {
    /// The project file's path.
    pub path: PathBuf,
    /// Its folder.
    pub dir: PathBuf,
    /// The content, paths resolved.
    pub spec: ProjectFile,
    /// Parsed project-wide naive-time offset.
    pub naive_offset: Option<FixedOffset>,
}

impl Project {
    /// Reads and checks a project file; the first problem is the error (see [`Project::load_all`]).
    pub fn load(path: &Path) -> Result<Project, IoError> {
        Self::load_all(path).map_err(first)
    }

    /// Reads and checks a project file, reporting every problem of its values: a file that is
    /// not TOML or has an unknown key gives that one error; otherwise every value out of its
    /// bounds is listed.
    pub fn load_all(path: &Path) -> Result<Project, Vec<IoError>> {
        let text = std::fs::read_to_string(path).map_err(|e| vec![IoError::file(path, e)])?;
        Self::from_str_all(&text, path)
    }

    /// Parses project text as if read from `path`; the first problem is the error.
    pub fn from_str_at(text: &str, path: &Path) -> Result<Project, IoError> {
        Self::from_str_all(text, path).map_err(first)
    }

    /// Parses project text as if read from `path`, reporting every problem (see
    /// [`Project::load_all`]).
    pub fn from_str_all(text: &str, path: &Path) -> Result<Project, Vec<IoError>> {
        let mut spec: ProjectFile =
            toml::from_str(text).map_err(|e| vec![IoError::from_toml(&e, text, path)])?;
        // The folder as the user wrote it ("" for a bare file name): paths are shown as typed.
        let parent = path.parent().unwrap_or(Path::new(""));
        let dir = if parent.as_os_str().is_empty() {
            PathBuf::from(".")
        } else {
            parent.to_path_buf()
        };
        let mut errors = Vec::new();
        let naive_offset = match &spec.naive_time_utc_offset {
            Some(s) => match parse_offset(s) {
                Ok(o) => Some(o),
                Err(m) => {
                    errors.push(IoError::content(
                        Position::file(path).field("naive_time_utc_offset"),
                        m,
                    ));
                    None
                }
            },
            None => None,
        };
        validate(&spec, path, &mut errors);
        validate_gap_fill(&spec, text, path, &mut errors);
        validate_tide_field(&spec, text, path, &mut errors);
        if !errors.is_empty() {
            return Err(errors);
        }
        spec.zoning = resolve(parent, &spec.zoning);
        spec.output.dir = resolve(parent, &spec.output.dir);
        for g in &mut spec.gauges {
            g.record = resolve(parent, &g.record);
            if let Some(c) = &g.constants {
                g.constants = Some(resolve(parent, c));
            }
            if let Some(d) = &g.datums {
                g.datums = Some(resolve(parent, d));
            }
        }
        for v in &mut spec.virtual_gauges {
            v.constants = resolve(parent, &v.constants);
        }
        for g in &spec.gauges {
            if let Some(d) = &g.datums {
                if let Err(e) = gauge_datums(g, d) {
                    errors.push(e);
                }
            }
        }
        if !errors.is_empty() {
            return Err(errors);
        }
        for s in &mut spec.soundings {
            for f in &mut s.files {
                *f = resolve(parent, f);
            }
        }
        Ok(Project {
            path: path.to_path_buf(),
            dir,
            spec,
            naive_offset,
        })
    }

    /// The naive-time offset for a gauge (its own, else the project's).
    pub fn gauge_naive_offset(&self, g: &GaugeSpec) -> Option<FixedOffset> {
        g.naive_time_utc_offset
            .as_deref()
            .and_then(|s| parse_offset(s).ok())
            .or(self.naive_offset)
    }
}

/// A gauge's datums file, read and checked: its layout, and its gauge id when it records one.
pub fn gauge_datums(
    g: &GaugeSpec,
    path: &Path,
) -> Result<crate::io::datums_file::DatumsFile, IoError> {
    let f = crate::io::datums_file::read_datums(path)?;
    if let Some(id) = f.gauge.as_deref().filter(|id| *id != g.id) {
        return Err(IoError::content(
            Position::file(path).field("gauge"),
            format!(
                "gauge '{}' names this datums file, but it holds the datums of gauge '{id}'",
                g.id
            ),
        ));
    }
    Ok(f)
}

/// Why a gauge's `zero_above_datum_m` or `mean_level_above_datum_m` disagrees with its datums
/// file: the zero differs from the one the file was computed with (by more than 0.1 mm), or the
/// mean level from the file's MSL above chart datum by more than twice the MSL's u. One sentence
/// each; empty when they agree.
pub fn datums_disagreements(g: &GaugeSpec, f: &crate::io::datums_file::DatumsFile) -> Vec<String> {
    let mut out = Vec::new();
    if let Some(z) = f.zero_above_datum_m {
        if (z - g.zero_above_datum_m).abs() > 1e-4 {
            out.push(format!(
                "zero_above_datum_m = {} but the datums file was computed with the zero {z} m above chart datum",
                g.zero_above_datum_m
            ));
        }
    }
    if let Some(msl) = f.msl.above_chart_datum_m {
        if (msl - g.mean_level_above_datum_m).abs() > 2.0 * f.msl.u_m {
            out.push(format!(
                "mean_level_above_datum_m = {} but the datums file's MSL is {msl} m ± {} (1σ) above chart datum, more than twice its u apart",
                g.mean_level_above_datum_m, f.msl.u_m
            ));
        }
    }
    out
}

/// The first of a non-empty list of errors.
fn first(errors: Vec<IoError>) -> IoError {
    errors
        .into_iter()
        .next()
        .expect("a failed project check reports at least one error")
}

/// Longest `max_gap_min` accepted, minutes: a gap of more than 6 h (half a semidiurnal
/// period) holds a whole high or low water that no interpolation across it can see. Common
/// practice.
pub const MAX_GAP_REFUSED_ABOVE_MIN: f64 = 360.0;

/// Longest `lowpass_cutoff_min` accepted, minutes: a low-pass filter removes periods shorter
/// than its cut-off, and the shallow-water harmonics of the tide itself have periods from about
/// 3 h (M8, 3.1 h); a longer cut-off would smooth the tide, not the noise. Common practice.
pub const LOWPASS_CUTOFF_REFUSED_ABOVE_MIN: f64 = 180.0;

/// Longest window or interval setting of `[qc]` and `[interpolation]` accepted, minutes: a day
/// spans two semidiurnal tides, and a test window or step longer than that no longer describes
/// one part of a tide. Common practice.
pub const INTERVAL_REFUSED_ABOVE_MIN: f64 = 1440.0;

/// Every problem of a parsed project file's values, in file order.
fn validate(spec: &ProjectFile, path: &Path, errors: &mut Vec<IoError>) {
    use crate::compute::uncertainty::{
        CUSTOM_ORDER_REFUSED_ABOVE, U_HEIGHT_REFUSED_ABOVE_M, U_RANGE_RATIO_REFUSED_ABOVE,
        U_SOUNDING_B_REFUSED_ABOVE, U_TIME_CORRECTOR_REFUSED_ABOVE_MIN,
    };
    let at = |field: &str| Position::file(path).field(field.to_string());
    let mut err = |field: String, m: String| errors.push(IoError::content(at(&field), m));
    if spec.gauges.is_empty() {
        err(
            "gauge".into(),
            "the project names no gauge ([[gauge]] tables)".into(),
        );
    }
    // A standard uncertainty: finite, ≥ 0 and at most `max` (with the likely slip named).
    let u_check = |v: f64, max: f64, unit: &str, hint: &str| -> Option<String> {
        if !(v.is_finite() && v >= 0.0) {
            Some(format!("expected a standard uncertainty ≥ 0, found {v}"))
        } else if v > max {
            Some(format!(
                "standard uncertainty {v}{unit} is beyond the plausible {max}{unit} ({hint}?)"
            ))
        } else {
            None
        }
    };
    const CM: &str = "centimetres or millimetres instead of metres";
    // An interval in minutes: finite, > 0 and at most `max`.
    let interval = |v: f64, max: f64, why: &str| -> Option<String> {
        if !(v.is_finite() && v > 0.0) {
            Some(format!("expected a positive number of minutes, found {v}"))
        } else if v > max {
            Some(format!("{v} min is beyond the plausible {max} min: {why}"))
        } else {
            None
        }
    };
    let mut seen = std::collections::HashSet::new();
    for (i, g) in spec.gauges.iter().enumerate() {
        let f = |k: &str| format!("gauge[{i}].{k}");
        if !seen.insert(g.id.clone()) {
            err(f("id"), format!("gauge id '{}' is used twice", g.id));
        }
        for (k, v) in [
            ("zero_above_datum_m", g.zero_above_datum_m),
            ("mean_level_above_datum_m", g.mean_level_above_datum_m),
            ("lon", g.lon),
            ("lat", g.lat),
        ] {
            if !v.is_finite() {
                err(f(k), "expected a finite number".into());
            }
        }
        for (k, v) in [
            ("zero_above_datum_m", g.zero_above_datum_m),
            ("mean_level_above_datum_m", g.mean_level_above_datum_m),
        ] {
            if v.is_finite() && v.abs() > GAUGE_LEVEL_LIMIT_M {
                let shown = if v.abs() < 1e6 {
                    format!("{v}")
                } else {
                    format!("{v:e}")
                };
                err(
                    f(k),
                    format!(
                        "{shown} m is not a plausible height relative to chart datum (beyond ±{GAUGE_LEVEL_LIMIT_M} m): is it in millimetres or centimetres, or mistyped?"
                    ),
                );
            }
        }
        if g.lon.is_finite() && !(-180.0..=180.0).contains(&g.lon) {
            err(
                f("lon"),
                format!("longitude {} is beyond ±180° (WGS 84 degrees)", g.lon),
            );
        }
        if g.lat.is_finite() && !(-90.0..=90.0).contains(&g.lat) {
            err(
                f("lat"),
                format!("latitude {} is beyond ±90° (WGS 84 degrees)", g.lat),
            );
        }
        if let Some(m) = interval(
            g.max_gap_min,
            MAX_GAP_REFUSED_ABOVE_MIN,
            "a longer gap holds a whole high or low water that interpolation cannot see",
        ) {
            err(f("max_gap_min"), m);
        }
        if let Some(o) = &g.naive_time_utc_offset {
            if let Err(m) = parse_offset(o) {
                err(f("naive_time_utc_offset"), m.to_string());
            }
        }
        if let Some(c) = g.lowpass_cutoff_min {
            if let Some(m) = interval(
                c,
                LOWPASS_CUTOFF_REFUSED_ABOVE_MIN,
                "a longer cut-off period smooths the tide itself (its shallow-water harmonics have periods from about 3 h)",
            ) {
                err(f("lowpass_cutoff_min"), m);
            }
        }
        for (k, v) in [("band_min_m", g.band_min_m), ("band_max_m", g.band_max_m)] {
            if v.is_some_and(|v| !v.is_finite()) {
                err(f(k), "expected a finite number".into());
            }
        }
        if let (Some(a), Some(b)) = (g.band_min_m, g.band_max_m) {
            if a >= b {
                err(
                    f("band_max_m"),
                    format!(
                        "the plausible band is empty: band_min_m {a} is not below band_max_m {b}"
                    ),
                );
            }
        }
        for (k, v) in [("u_gauge_m", g.u_gauge_m), ("u_datum_m", g.u_datum_m)] {
            if let Some(m) = v.and_then(|v| u_check(v, U_HEIGHT_REFUSED_ABOVE_M, " m", CM)) {
                err(f(k), m);
            }
        }
    }
    for (i, v) in spec.virtual_gauges.iter().enumerate() {
        let f = |k: &str| format!("virtual_gauge[{i}].{k}");
        if !seen.insert(v.id.clone()) {
            err(
                f("id"),
                format!(
                    "id '{}' is already used by a gauge or another virtual gauge",
                    v.id
                ),
            );
        }
        if !(v.lon.is_finite() && (-180.0..=180.0).contains(&v.lon)) {
            err(
                f("lon"),
                format!("longitude {} is beyond ±180° (WGS 84 degrees)", v.lon),
            );
        }
        if !(v.lat.is_finite() && (-90.0..=90.0).contains(&v.lat)) {
            err(
                f("lat"),
                format!("latitude {} is beyond ±90° (WGS 84 degrees)", v.lat),
            );
        }
    }
    {
        let q = &spec.qc;
        let f = |k: &str| format!("qc.{k}");
        for (k, v) in [
            ("gap_factor", q.gap_factor),
            ("spike_k", q.spike_k),
            ("spike_min_m", q.spike_min_m),
            ("max_rate_m_per_h", q.max_rate_m_per_h.unwrap_or(1.0)), // absent: derived
            ("rate_allowance_m", q.rate_allowance_m),
            ("shift_k", q.shift_k),
            ("shift_min_m", q.shift_min_m),
            ("band_half_width_m", q.band_half_width_m),
            ("compare_max_mean_m", q.compare_max_mean_m),
            ("compare_max_drift_m_per_day", q.compare_max_drift_m_per_day),
            ("boundary_shift_k", q.boundary_shift_k),
            ("lag_k", q.lag_k),
            ("compare_drift_window_days", q.compare_drift_window_days),
            (
                "compare_max_window_drift_m_per_day",
                q.compare_max_window_drift_m_per_day,
            ),
        ] {
            if !(v.is_finite() && v > 0.0) {
                err(f(k), format!("expected a positive number, found {v}"));
            }
        }
        for (k, v) in [
            ("spike_window_min", q.spike_window_min),
            (
                "flat_min_duration_min",
                q.flat_min_duration_min.unwrap_or(1.0),
            ),
            ("shift_window_min", q.shift_window_min),
            ("compare_max_lag_min", q.compare_max_lag_min),
            ("compare_lag_search_min", q.compare_lag_search_min),
            ("compare_shift_window_min", q.compare_shift_window_min),
            ("boundary_window_min", q.boundary_window_min),
            ("lag_min_min", q.lag_min_min),
        ] {
            if let Some(m) = interval(
                v,
                INTERVAL_REFUSED_ABOVE_MIN,
                "a window longer than a day no longer describes one part of a tide",
            ) {
                err(f(k), m);
            }
        }
    }
    if let Some(m) = interval(
        spec.interpolation.cubic_above_step_min,
        INTERVAL_REFUSED_ABOVE_MIN,
        "a record step longer than a day cannot be interpolated into a tide",
    ) {
        err("interpolation.cubic_above_step_min".into(), m);
    }
    if let Some(u) = &spec.uncertainty {
        let f = |k: &str| format!("uncertainty.{k}");
        for (k, v, max, unit, hint) in [
            (
                "sounding_a_m",
                u.sounding_a_m,
                U_HEIGHT_REFUSED_ABOVE_M,
                " m",
                CM,
            ),
            (
                "sounding_b",
                u.sounding_b,
                U_SOUNDING_B_REFUSED_ABOVE,
                "",
                "a percentage instead of a fraction",
            ),
            (
                "default_u_gauge_m",
                u.default_u_gauge_m,
                U_HEIGHT_REFUSED_ABOVE_M,
                " m",
                CM,
            ),
            (
                "default_u_datum_m",
                u.default_u_datum_m,
                U_HEIGHT_REFUSED_ABOVE_M,
                " m",
                CM,
            ),
            (
                "default_u_time_corrector_min",
                u.default_u_time_corrector_min,
                U_TIME_CORRECTOR_REFUSED_ABOVE_MIN,
                " min",
                "seconds instead of minutes",
            ),
            (
                "default_u_range_ratio",
                u.default_u_range_ratio,
                U_RANGE_RATIO_REFUSED_ABOVE,
                "",
                "a percentage instead of a ratio",
            ),
            (
                "default_u_zone_m",
                u.default_u_zone_m,
                U_HEIGHT_REFUSED_ABOVE_M,
                " m",
                CM,
            ),
        ] {
            if let Some(m) = u_check(v, max, unit, hint) {
                err(f(k), m);
            }
        }
        if !(u.acceptance_share > 0.0 && u.acceptance_share <= 1.0) {
            err(
                f("acceptance_share"),
                format!("expected a share in (0, 1], found {}", u.acceptance_share),
            );
        }
        let (a_max, b_max) = CUSTOM_ORDER_REFUSED_ABOVE;
        for (i, c) in u.custom_orders.iter().enumerate() {
            if !(c.a_m.is_finite() && c.a_m > 0.0 && c.b.is_finite() && c.b >= 0.0) {
                err(
                    f(&format!("custom_order[{i}]")),
                    "expected a_m > 0 and b ≥ 0 (metres, 95 %)".into(),
                );
            } else if c.a_m > a_max || c.b > b_max {
                err(
                    f(&format!("custom_order[{i}]")),
                    format!(
                        "a_m = {} m, b = {} is looser than the plausible a_m ≤ {a_max} m, b ≤ {b_max} (twice S-44 Order 2; centimetres or percent?)",
                        c.a_m, c.b
                    ),
                );
            }
        }
    }
    for (i, s) in spec.soundings.iter().enumerate() {
        if s.files.is_empty() {
            err(
                format!("soundings[{i}].files"),
                "expected at least one file".into(),
            );
        }
    }
}

/// A path of the project file read from the project file's folder `dir` (as the user wrote it,
/// empty for a bare file name): an absolute path and a path beside a bare file name stay as
/// written; otherwise the folder is joined on without a doubled `./` (`./p.toml` and `./a.csv`
/// give `./a.csv`, not `././a.csv`), and a path that climbs out of the current folder keeps no
/// `./` before its `..` (`./p.toml` and `../s/x.csv` give `../s/x.csv`). Nothing is
/// canonicalised.
fn resolve(dir: &Path, p: &Path) -> PathBuf {
    if p.is_absolute() || dir.as_os_str().is_empty() {
        return p.to_path_buf();
    }
    let rest: PathBuf = p
        .components()
        .skip_while(|c| matches!(c, std::path::Component::CurDir))
        .collect();
    let dir_is_here = dir
        .components()
        .all(|c| matches!(c, std::path::Component::CurDir));
    if rest.as_os_str().is_empty() {
        dir.to_path_buf()
    } else if dir_is_here
        && matches!(
            rest.components().next(),
            Some(std::path::Component::ParentDir)
        )
    {
        // `./` before `..` says nothing: `../s/x.csv`, not `./../s/x.csv`.
        rest
    } else {
        dir.join(rest)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paths_are_joined_as_typed_without_a_doubled_dot() {
        // (project file, path written in it) -> the path the run uses and prints.
        for (project, written, want) in [
            ("project.toml", "./a.csv", "./a.csv"),
            ("project.toml", "a.csv", "a.csv"),
            ("./project.toml", "./a.csv", "./a.csv"),
            ("./project.toml", "a.csv", "./a.csv"),
            ("day1/project.toml", "./gauges/a.csv", "day1/gauges/a.csv"),
            ("day1/project.toml", "../a.csv", "day1/../a.csv"),
            ("./project.toml", "../../s/a.csv", "../../s/a.csv"),
            ("./project.toml", "./../s/a.csv", "../s/a.csv"),
            ("project.toml", "../s/a.csv", "../s/a.csv"),
            ("day1/project.toml", ".", "day1"),
            ("day1/project.toml", "/data/a.csv", "/data/a.csv"),
        ] {
            let text = MINIMAL.replace("\"a.csv\"", &format!("{written:?}"));
            let p = Project::from_str_at(&text, Path::new(project)).unwrap();
            assert_eq!(
                p.spec.gauges[0].record,
                PathBuf::from(want),
                "{project} + {written}"
            );
            assert_eq!(p.spec.gauges[0].record.display().to_string(), want);
        }
    }

    const MINIMAL: &str = r#"
name = "t"
zoning = "z.geojson"
[[gauge]]
id = "a"
lon = 1.0
lat = 50.0
record = "a.csv"
units = "m"
zero_above_datum_m = -1.2
mean_level_above_datum_m = 2.0
[[soundings]]
files = ["s.csv"]
crs = "EPSG:4326"
columns = { time = "time", x = "lon", y = "lat", depth = "depth" }
"#;

    /// `[tide_field]`: every bad value is named with its line and key; a field without three
    /// stations, or without a gauge that names constants, is refused; the bounds are the
    /// discrete budget's own refuse-limits (common practice: a standard uncertainty beyond
    /// them is a slip of units).
    #[test]
    fn tide_field_values_are_checked_at_their_lines() {
        let with = |table: &str, constants: bool| {
            let mut t = MINIMAL.to_string();
            if constants {
                t = t.replace("units = \"m\"", "units = \"m\"\nconstants = \"a.toml\"");
                t.push_str("[[virtual_gauge]]\nid = \"v1\"\nlon = 1.1\nlat = 50.0\nconstants = \"v1.toml\"\n");
                t.push_str("[[virtual_gauge]]\nid = \"v2\"\nlon = 1.0\nlat = 50.1\nconstants = \"v2.toml\"\n");
            }
            t.push_str(table);
            Project::from_str_all(&t, Path::new("p.toml"))
        };
        let ok = with("[tide_field]\nmode = \"corrector_field\"\n", true).unwrap();
        let f = ok.spec.tide_field.unwrap();
        assert_eq!(f.mode, TideFieldMode::CorrectorField);
        assert_eq!(f.u_field_m, None);
        let bad = "[tide_field]\nmode = \"astronomical_residual\"\nu_field_m = -0.1\nfield_scale_km = 0\nu_station_range_ratio = 0.9\nu_station_time_min = 61\n";
        let errs = with(bad, true).unwrap_err();
        // The line of the table's header in the whole text (the keys follow it in order).
        let before = MINIMAL.lines().count() + 1 + 10;
        let msgs: Vec<String> = errs.iter().map(|e| e.to_string()).collect();
        assert_eq!(msgs.len(), 4, "{msgs:#?}");
        for (key, line) in [
            ("u_field_m", before + 3),
            ("field_scale_km", before + 4),
            ("u_station_range_ratio", before + 5),
            ("u_station_time_min", before + 6),
        ] {
            let m = msgs
                .iter()
                .find(|m| m.contains(&format!("tide_field.{key}")))
                .unwrap_or_else(|| panic!("{key}: {msgs:#?}"));
            assert!(m.starts_with(&format!("p.toml:{line}")), "{m}");
        }
        // At the bounds, accepted.
        with(
            "[tide_field]\nmode = \"corrector_field\"\nu_field_m = 1.0\nu_station_range_ratio = 0.5\nu_station_time_min = 60\nfield_scale_km = 1000\n",
            true,
        )
        .unwrap();
        let errs = with("[tide_field]\nmode = \"corrector_field\"\n", false).unwrap_err();
        let all: String = errs.iter().map(|e| e.to_string() + "\n").collect();
        assert!(all.contains("no gauge names a `constants` file"), "{all}");
        assert!(all.contains("at least three stations"), "{all}");
        let e = with("[tide_field]\nmode = \"kriging\"\n", true).unwrap_err();
        let m = e[0].to_string();
        assert!(
            m.contains("'kriging'") && m.contains("corrector_field"),
            "{m}"
        );
    }

    #[test]
    fn paths_are_relative_to_the_project_file() {
        let p = Project::from_str_at(MINIMAL, Path::new("/data/day1/project.toml")).unwrap();
        assert_eq!(p.spec.zoning, PathBuf::from("/data/day1/z.geojson"));
        assert_eq!(p.spec.gauges[0].record, PathBuf::from("/data/day1/a.csv"));
        assert_eq!(
            p.spec.soundings[0].files[0],
            PathBuf::from("/data/day1/s.csv")
        );
        assert_eq!(p.spec.output.dir, PathBuf::from("/data/day1/out"));
        assert_eq!(p.spec.gauges[0].max_gap_min, 30.0);
    }

    #[test]
    fn unknown_key_is_an_error_with_its_line() {
        let text = MINIMAL.replace("units = \"m\"", "units = \"m\"\nzero_offset = 1.0");
        let e = Project::from_str_at(&text, Path::new("p.toml")).unwrap_err();
        let msg = e.to_string();
        assert!(msg.starts_with("p.toml:10"), "{msg}");
        assert!(msg.contains("zero_offset"), "{msg}");
    }

    /// Every value out of its bounds is reported, in file order, not only the first; each bound
    /// accepts its limit and refuses just beyond it (limits: the constants above and those of
    /// `compute::uncertainty`, common practice).
    #[test]
    fn every_bad_value_is_reported_and_each_bound_is_inclusive() {
        let text = MINIMAL
            .replace("lat = 50.0", "lat = -90.5")
            .replace("units = \"m\"", "units = \"m\"\nmax_gap_min = 361\nu_datum_m = 1.5")
            + "[qc]\nshift_window_min = 1441\n[uncertainty]\nsounding_b = 0.5\ndefault_u_range_ratio = 0.51\n";
        let errors = Project::from_str_all(&text, Path::new("p.toml")).unwrap_err();
        let got: Vec<String> = errors.iter().map(|e| e.to_string()).collect();
        assert_eq!(
            got,
            vec![
                "p.toml: field 'gauge[0].lat': latitude -90.5 is beyond ±90° (WGS 84 degrees)",
                "p.toml: field 'gauge[0].max_gap_min': 361 min is beyond the plausible 360 min: a longer gap holds a whole high or low water that interpolation cannot see",
                "p.toml: field 'gauge[0].u_datum_m': standard uncertainty 1.5 m is beyond the plausible 1 m (centimetres or millimetres instead of metres?)",
                "p.toml: field 'qc.shift_window_min': 1441 min is beyond the plausible 1440 min: a window longer than a day no longer describes one part of a tide",
                "p.toml: field 'uncertainty.sounding_b': standard uncertainty 0.5 is beyond the plausible 0.05 (a percentage instead of a fraction?)",
                "p.toml: field 'uncertainty.default_u_range_ratio': standard uncertainty 0.51 is beyond the plausible 0.5 (a percentage instead of a ratio?)",
            ]
        );
        // The first of them is `from_str_at`'s error.
        assert_eq!(
            Project::from_str_at(&text, Path::new("p.toml"))
                .unwrap_err()
                .to_string(),
            got[0]
        );
        // At the limits, everything is accepted.
        let text = MINIMAL
            .replace("lat = 50.0", "lat = -90.0")
            .replace(
                "units = \"m\"",
                "units = \"m\"\nmax_gap_min = 360\nu_datum_m = 1.0\nlowpass_cutoff_min = 180",
            )
            + "[qc]\nshift_window_min = 1440\n[uncertainty]\nsounding_b = 0.05\ndefault_u_range_ratio = 0.5\ndefault_u_time_corrector_min = 60\n[[uncertainty.custom_order]]\nname = \"loose\"\na_m = 2.0\nb = 0.05\n";
        Project::from_str_all(&text, Path::new("p.toml")).unwrap();
    }

    #[test]
    fn bad_units_and_offset_are_named() {
        let text = MINIMAL.replace("units = \"m\"", "units = \"yards\"");
        let msg = Project::from_str_at(&text, Path::new("p.toml"))
            .unwrap_err()
            .to_string();
        assert!(msg.contains("yards"), "{msg}");
        let text = format!("naive_time_utc_offset = \"1h\"\n{MINIMAL}");
        let msg = Project::from_str_at(&text, Path::new("p.toml"))
            .unwrap_err()
            .to_string();
        assert!(msg.contains("naive_time_utc_offset"), "{msg}");
    }
}
