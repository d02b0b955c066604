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
#[derive(Debug, Clone, Deserialize)]
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
}

/// `[qc]`: gauge-record quality control. The reducer does not interpolate through a flagged
/// sample. Defaults: see `compute::qc::QcThresholds` (from memory / common practice, documented in
/// docs/qc.md).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct QcSpec {
    /// Run QC when loading gauges for `reduce`, `check`, `correctors` (default true).
    pub enabled: bool,
    /// Gap threshold in nominal steps.
    pub gap_factor: f64,
    /// Spike test window, minutes.
    pub spike_window_min: f64,
    /// Spike threshold, robust standard deviations.
    pub spike_k: f64,
    /// Smallest spike, metres.
    pub spike_min_m: f64,
    /// Fastest plausible rate, metres per hour.
    pub max_rate_m_per_h: f64,
    /// Noise allowance of the rate test, metres.
    pub rate_allowance_m: f64,
    /// Fewest repeated readings that make a flat line.
    pub flat_min_samples: usize,
    /// Shortest flat line, minutes.
    pub flat_min_duration_min: f64,
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

impl Default for QcSpec {
    fn default() -> Self {
        let t = crate::compute::qc::QcThresholds::default();
        QcSpec {
            enabled: true,
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

/// `[interpolation]`: how gauge records are interpolated in time.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct InterpolationSpec {
    /// With `interpolation = "auto"` (the default per gauge), records whose nominal step is
    /// longer than this many minutes use a natural cubic spline, others linear (default 10).
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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum InterpolationChoice {
    /// Linear for records stepping `cubic_above_step_min` or less, natural cubic spline above.
    #[default]
    Auto,
    /// Always linear.
    Linear,
    /// Always a natural cubic spline.
    Cubic,
}

/// Uncertainty inputs (all standard uncertainties, 1σ) and the survey order to judge against.
///
/// The `default_*` values apply to gauges and zones that do not give their own. Their built-in
/// defaults are **demo values** (typical magnitudes, not authority-approved numbers): replace them
/// with the values of your survey specification.
#[derive(Debug, Clone, Deserialize)]
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
#[derive(Debug, Clone, Deserialize)]
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
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OutputSpec {
    /// Output directory, relative to the project file (created when missing).
    #[serde(default = "default_out_dir")]
    pub dir: PathBuf,
}

impl Default for OutputSpec {
    fn default() -> Self {
        OutputSpec {
            dir: default_out_dir(),
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
#[derive(Debug, Clone, Deserialize)]
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
        }
    }
}

fn default_max_gap_min() -> f64 {
    30.0
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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DepthSign {
    /// Depths positive down (the usual).
    PositiveDown,
    /// Heights positive up (depths written negative): negated on reading.
    PositiveUp,
}

/// Which columns hold what. Each value is a header name, or `#N` for the N-th column (1-based).
#[derive(Debug, Clone, Deserialize)]
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
#[derive(Debug, Clone, Deserialize)]
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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Deserialize)]
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
    /// Reads and checks a project file.
    pub fn load(path: &Path) -> Result<Project, IoError> {
        let text = std::fs::read_to_string(path).map_err(|e| IoError::file(path, e))?;
        Self::from_str_at(&text, path)
    }

    /// Parses project text as if read from `path`.
    pub fn from_str_at(text: &str, path: &Path) -> Result<Project, IoError> {
        let mut spec: ProjectFile =
            toml::from_str(text).map_err(|e| IoError::from_toml(&e, text, path))?;
        // The folder as the user wrote it ("" for a bare file name): paths are shown as typed.
        let parent = path.parent().unwrap_or(Path::new(""));
        let dir = if parent.as_os_str().is_empty() {
            PathBuf::from(".")
        } else {
            parent.to_path_buf()
        };
        let at = |field: &str| Position::file(path).field(field.to_string());
        let naive_offset = match &spec.naive_time_utc_offset {
            Some(s) => Some(
                parse_offset(s).map_err(|m| IoError::content(at("naive_time_utc_offset"), m))?,
            ),
            None => None,
        };
        if spec.gauges.is_empty() {
            return Err(IoError::content(
                at("gauge"),
                "the project names no gauge ([[gauge]] tables)",
            ));
        }
        let mut seen = std::collections::HashSet::new();
        for (i, g) in spec.gauges.iter().enumerate() {
            let f = |k: &str| at(&format!("gauge[{i}].{k}"));
            if !seen.insert(g.id.clone()) {
                return Err(IoError::content(
                    f("id"),
                    format!("gauge id '{}' is used twice", g.id),
                ));
            }
            for (k, v) in [
                ("zero_above_datum_m", g.zero_above_datum_m),
                ("mean_level_above_datum_m", g.mean_level_above_datum_m),
                ("lon", g.lon),
                ("lat", g.lat),
            ] {
                if !v.is_finite() {
                    return Err(IoError::content(f(k), "expected a finite number"));
                }
            }
            if !(g.max_gap_min.is_finite() && g.max_gap_min > 0.0) {
                return Err(IoError::content(
                    f("max_gap_min"),
                    format!(
                        "expected a positive number of minutes, found {}",
                        g.max_gap_min
                    ),
                ));
            }
            if let Some(o) = &g.naive_time_utc_offset {
                parse_offset(o).map_err(|m| IoError::content(f("naive_time_utc_offset"), m))?;
            }
            if let Some(c) = g.lowpass_cutoff_min {
                if !(c.is_finite() && c > 0.0) {
                    return Err(IoError::content(
                        f("lowpass_cutoff_min"),
                        format!("expected a positive number of minutes, found {c}"),
                    ));
                }
            }
            for (k, v) in [("band_min_m", g.band_min_m), ("band_max_m", g.band_max_m)] {
                if v.is_some_and(|v| !v.is_finite()) {
                    return Err(IoError::content(f(k), "expected a finite number"));
                }
            }
            if let (Some(a), Some(b)) = (g.band_min_m, g.band_max_m) {
                if a >= b {
                    return Err(IoError::content(
                        f("band_max_m"),
                        format!("the plausible band is empty: band_min_m {a} is not below band_max_m {b}"),
                    ));
                }
            }
        }
        {
            let q = &spec.qc;
            let f = |k: &str| at(&format!("qc.{k}"));
            for (k, v) in [
                ("gap_factor", q.gap_factor),
                ("spike_window_min", q.spike_window_min),
                ("spike_k", q.spike_k),
                ("spike_min_m", q.spike_min_m),
                ("max_rate_m_per_h", q.max_rate_m_per_h),
                ("rate_allowance_m", q.rate_allowance_m),
                ("flat_min_duration_min", q.flat_min_duration_min),
                ("shift_window_min", q.shift_window_min),
                ("shift_k", q.shift_k),
                ("shift_min_m", q.shift_min_m),
                ("band_half_width_m", q.band_half_width_m),
                ("compare_max_mean_m", q.compare_max_mean_m),
                ("compare_max_drift_m_per_day", q.compare_max_drift_m_per_day),
                ("compare_max_lag_min", q.compare_max_lag_min),
                ("compare_lag_search_min", q.compare_lag_search_min),
                ("compare_shift_window_min", q.compare_shift_window_min),
                ("boundary_window_min", q.boundary_window_min),
                ("boundary_shift_k", q.boundary_shift_k),
                ("lag_min_min", q.lag_min_min),
                ("lag_k", q.lag_k),
                ("compare_drift_window_days", q.compare_drift_window_days),
                (
                    "compare_max_window_drift_m_per_day",
                    q.compare_max_window_drift_m_per_day,
                ),
            ] {
                if !(v.is_finite() && v > 0.0) {
                    return Err(IoError::content(
                        f(k),
                        format!("expected a positive number, found {v}"),
                    ));
                }
            }
        }
        let c = spec.interpolation.cubic_above_step_min;
        if !(c.is_finite() && c > 0.0) {
            return Err(IoError::content(
                at("interpolation.cubic_above_step_min"),
                format!("expected a positive number of minutes, found {c}"),
            ));
        }
        if let Some(u) = &spec.uncertainty {
            let f = |k: &str| at(&format!("uncertainty.{k}"));
            for (k, v) in [
                ("sounding_a_m", u.sounding_a_m),
                ("sounding_b", u.sounding_b),
                ("default_u_gauge_m", u.default_u_gauge_m),
                ("default_u_datum_m", u.default_u_datum_m),
                (
                    "default_u_time_corrector_min",
                    u.default_u_time_corrector_min,
                ),
                ("default_u_range_ratio", u.default_u_range_ratio),
                ("default_u_zone_m", u.default_u_zone_m),
            ] {
                if !(v.is_finite() && v >= 0.0) {
                    return Err(IoError::content(
                        f(k),
                        format!("expected a standard uncertainty ≥ 0, found {v}"),
                    ));
                }
            }
            if !(u.acceptance_share > 0.0 && u.acceptance_share <= 1.0) {
                return Err(IoError::content(
                    f("acceptance_share"),
                    format!("expected a share in (0, 1], found {}", u.acceptance_share),
                ));
            }
            for (i, c) in u.custom_orders.iter().enumerate() {
                if !(c.a_m.is_finite() && c.a_m > 0.0 && c.b.is_finite() && c.b >= 0.0) {
                    return Err(IoError::content(
                        f(&format!("custom_order[{i}]")),
                        "expected a_m > 0 and b ≥ 0 (metres, 95 %)",
                    ));
                }
            }
        }
        for (i, g) in spec.gauges.iter().enumerate() {
            for (k, v) in [("u_gauge_m", g.u_gauge_m), ("u_datum_m", g.u_datum_m)] {
                if let Some(v) = v {
                    if !(v.is_finite() && v >= 0.0) {
                        return Err(IoError::content(
                            at(&format!("gauge[{i}].{k}")),
                            format!("expected a standard uncertainty ≥ 0, found {v}"),
                        ));
                    }
                }
            }
        }
        for (i, s) in spec.soundings.iter().enumerate() {
            if s.files.is_empty() {
                return Err(IoError::content(
                    at(&format!("soundings[{i}].files")),
                    "expected at least one file",
                ));
            }
        }
        spec.zoning = resolve(parent, &spec.zoning);
        spec.output.dir = resolve(parent, &spec.output.dir);
        for g in &mut spec.gauges {
            g.record = resolve(parent, &g.record);
            if let Some(c) = &g.constants {
                g.constants = Some(resolve(parent, c));
            }
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

/// A path of the project file read from the project file's folder `dir` (as the user wrote it,
/// empty for a bare file name): an absolute path and a path beside a bare file name stay as
/// written; otherwise the folder is joined on without a doubled `./` (`./p.toml` and `./a.csv`
/// give `./a.csv`, not `././a.csv`). Nothing is canonicalised.
fn resolve(dir: &Path, p: &Path) -> PathBuf {
    if p.is_absolute() || dir.as_os_str().is_empty() {
        return p.to_path_buf();
    }
    let rest: PathBuf = p
        .components()
        .skip_while(|c| matches!(c, std::path::Component::CurDir))
        .collect();
    if rest.as_os_str().is_empty() {
        dir.to_path_buf()
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
