//! Harmonic-constants files (TOML, layout `ebbwise-harmonic-constants/1`).
//!
//! Written by `ebbwise analyse`, read by `ebbwise predict` and by a project's `[[gauge]] constants`.
//! Layout (every length in metres, angles in degrees, times ISO 8601 UTC):
//!
//! ```toml
//! format = "ebbwise-harmonic-constants/1"
//! source = "gauges/orlick.csv"      # the record analysed
//! gauge = "orlick"                  # when analysed from a project
//! levels = "above chart datum"      # or "above the record's zero"
//! z0_m = 2.5123                     # mean level Z0
//! u_z0_m = 0.0004                   # its standard uncertainty (1σ)
//! record_start_utc = "2026-05-01T00:00:00.000Z"
//! record_end_utc = "2026-05-30T23:00:00.000Z"
//! samples = 720
//! nodal = "per_sample"              # or "centre"
//! rayleigh_factor = 1.0             # absent when the constituents were given
//! residual_rms_m = 0.0213
//! variance_explained = 0.9987
//! form_factor = 0.17
//! tide_type = "semidiurnal"
//! caution = "…"
//!
//! [[constituent]]
//! name = "M2"
//! speed_deg_per_h = 28.9841042
//! amplitude_m = 1.20043             # H
//! phase_deg = 110.123               # G, Greenwich phase lag (UTC)
//! u_amplitude_m = 0.0011            # standard uncertainties (1σ)
//! u_phase_deg = 0.05
//! u_amplitude_fit_m = 0.0011        # their least-squares parts alone
//! u_phase_fit_deg = 0.05
//! # absorbs = ["T2"]                # unresolved constituents its constants carry
//! # inferred_from = "S2"            # for an inferred constituent, with
//! # inference_ratio = 0.272         # the amplitude ratio, the phase difference and their
//! # u_inference_ratio = 0.068       # standard uncertainties, and where the relation comes
//! # inference_phase_diff_deg = 0.0  # from: "equilibrium", "given" or "reference_station"
//! # u_inference_phase_diff_deg = 20.0
//! # inference_basis = "equilibrium"
//!
//! [[unresolved]]                    # every constituent the record cannot separate
//! name = "T2"
//! next_to = "S2"                    # nearest constituent of the analysis in speed
//! absorbed_by = "S2"                # the fitted one (or Z0) that carries its signal
//! expected_amplitude_m = 0.0236     # equilibrium ratio × f ratio × leakage × H, if tabulated
//! leakage = 0.97                    # |sin x / x|, x = π·Δω·T/360°
//! ```
//!
//! `short_record = true` marks constants from a record shorter than the analysis's minimum,
//! analysed on request. After the analysis's keys come how the record was read and analysed
//! (`tool_version`, `record_sha256`, `input_time_zone`, `input_units`, `datum`,
//! `zero_above_datum_m`, `samples_read`, `qc_applied`, the `[qc_set_aside]` counts by flag,
//! `inference`, `inference_reference_file`, `constituent_choice`; see [`Provenance`]), then with
//! `analyse --trend` the fitted `trend_m_per_yr`, `u_trend_m_per_yr` and `z0_epoch_utc`, and the
//! residual's `[diagnostics]` table ([`DiagnosticsEntry`]); each constituent carries its
//! `noise_ratio`. Every key added after the first files is optional, so older files
//! still read.
//!
//! Reading checks every constituent name against the table of `compute::astro` and its speed
//! against the table's (to 1e-6 °/h), so a file made with another definition of a constituent is
//! refused rather than predicted wrongly.

use std::collections::BTreeMap;
use std::path::Path;

use serde::{Deserialize, Serialize};

use super::error::{IoError, Position};
use super::numfmt::{round_to as round, AMPLITUDE_DECIMALS, HEIGHT_DECIMALS, UNCERTAINTY_DECIMALS};
use crate::compute::astro::constituent;
use crate::compute::harmonic::{
    tide_type, Analysis, HarmonicConstants, InferenceBasis, InferenceRule,
};

/// Layout name.
pub const CONSTANTS_FORMAT: &str = "ebbwise-harmonic-constants/1";

/// `levels` of constants analysed from a record whose datum relation is known (a project's
/// gauge, or a record with its zero's height above chart datum).
pub const LEVELS_CHART_DATUM: &str = "above chart datum";

/// `levels` of constants analysed from a record without a datum relation.
pub const LEVELS_RECORD_ZERO: &str = "above the record's zero";

/// One constituent as written.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct ConstituentEntry {
    /// Name (upper case, as in the constituent table).
    pub name: String,
    /// Angular speed, degrees per hour.
    pub speed_deg_per_h: f64,
    /// Amplitude H, metres.
    pub amplitude_m: f64,
    /// Greenwich phase lag G, degrees.
    pub phase_deg: f64,
    /// Standard uncertainty of H, metres.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_amplitude_m: Option<f64>,
    /// Standard uncertainty of G, degrees.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_phase_deg: Option<f64>,
    /// Inferred from this constituent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub inferred_from: Option<String>,
    /// Amplitude ratio used for the inference (inferred / `inferred_from`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub inference_ratio: Option<f64>,
    /// Standard uncertainty of that ratio.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_inference_ratio: Option<f64>,
    /// Phase difference used for the inference, G − G of `inferred_from`, degrees.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub inference_phase_diff_deg: Option<f64>,
    /// Standard uncertainty of that phase difference, degrees.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_inference_phase_diff_deg: Option<f64>,
    /// Where the inference relation comes from: `equilibrium`, `given` or `reference_station`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub inference_basis: Option<String>,
    /// The least-squares part of `u_amplitude_m`, metres.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_amplitude_fit_m: Option<f64>,
    /// The least-squares part of `u_phase_deg`, degrees.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_phase_fit_deg: Option<f64>,
    /// The residual's white-equivalent variance near its frequency over the residual's mean
    /// square, which scaled the least-squares part of its uncertainties (absent: white formula).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise_ratio: Option<f64>,
    /// Unresolved constituents whose signal this one's constants carry (see `[[unresolved]]`).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub absorbs: Vec<String>,
}

/// A constituent the record could not separate, as written (`[[unresolved]]`).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct UnresolvedEntry {
    /// The constituent left out.
    pub name: String,
    /// The nearest constituent in speed of the analysis (fitted, inferred or Z0).
    pub next_to: String,
    /// The fitted constituent (or Z0) whose constants carry its signal.
    pub absorbed_by: String,
    /// Expected amplitude absorbed, metres (equilibrium ratio × nodal factor ratio × leakage ×
    /// the fitted amplitude), when an equilibrium ratio is tabulated.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub expected_amplitude_m: Option<f64>,
    /// Share of its signal a fit over the record absorbs, `|sin x / x|`.
    pub leakage: f64,
}

/// The residual diagnostics as written (`[diagnostics]`; `compute::residual`).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct DiagnosticsEntry {
    /// Standard deviation of the record's sample-to-sample noise, metres.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise_floor_m: Option<f64>,
    /// RMS of the residual's lunar-day means (its slow part), metres.
    pub lunar_day_rms_m: f64,
    /// RMS of the residual without its slow part, metres.
    pub fast_rms_m: f64,
    /// Lunar-day means tested for a step and a trend.
    pub lunar_days: usize,
    /// The residual's fast part exceeds the noise floor by more than the misfit factor.
    pub misfit: bool,
    /// A level step was found in the residual.
    pub step_found: bool,
    /// The best step's size (after − before), metres, whether found or not.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub step_m: Option<f64>,
    /// Its standard uncertainty, metres.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_step_m: Option<f64>,
    /// Where the best step lies, UTC.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub step_at_utc: Option<String>,
    /// A trend was found in the residual (beyond a fitted one).
    pub trend_found: bool,
    /// The residual's trend, metres per year, whether found or not.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub residual_trend_m_per_yr: Option<f64>,
    /// Its standard uncertainty, metres per year.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_residual_trend_m_per_yr: Option<f64>,
    /// The residual's white-equivalent variance near zero frequency over its mean square.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise_ratio_mean_level: Option<f64>,
}

/// A constants file as written.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct ConstantsFile {
    /// Layout name, [`CONSTANTS_FORMAT`].
    pub format: String,
    /// The record analysed.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source: Option<String>,
    /// The gauge id, when analysed from a project.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub gauge: Option<String>,
    /// What the levels are above.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub levels: Option<String>,
    /// Mean level Z0, metres.
    pub z0_m: f64,
    /// Standard uncertainty of Z0, metres.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_z0_m: Option<f64>,
    /// First sample analysed, UTC.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub record_start_utc: Option<String>,
    /// Last sample analysed, UTC.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub record_end_utc: Option<String>,
    /// Samples used.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub samples: Option<usize>,
    /// `per_sample` or `centre`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub nodal: Option<String>,
    /// Rayleigh factor, when the constituents were chosen automatically.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rayleigh_factor: Option<f64>,
    /// Residual RMS, metres.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub residual_rms_m: Option<f64>,
    /// Share of variance explained.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub variance_explained: Option<f64>,
    /// Form factor (K1 + O1)/(M2 + S2).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub form_factor: Option<f64>,
    /// Tide type from the form factor.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tide_type: Option<String>,
    /// The caution.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub caution: Option<String>,
    /// The record is shorter than the analysis's minimum and was analysed on request.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub short_record: bool,
    /// The program that wrote the file, `ebbwise <version>`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tool_version: Option<String>,
    /// SHA-256 of the record file analysed, lowercase hex.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub record_sha256: Option<String>,
    /// How the record's times were read: each with its own UTC offset, and the offset given to
    /// times written without one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub input_time_zone: Option<String>,
    /// Units of the record's heights (`m`, `ft`, `us_ft`); the constants are in metres.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub input_units: Option<String>,
    /// What the levels are referred to: `chart datum` or `record zero`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub datum: Option<String>,
    /// Height of the record's zero above chart datum as given, metres (absent for `record zero`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub zero_above_datum_m: Option<f64>,
    /// Samples in the record, before QC.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub samples_read: Option<usize>,
    /// Whether quality control ran before the analysis.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub qc_applied: Option<bool>,
    /// Samples QC set aside, by flag (a sample with two flags counts under each).
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub qc_set_aside: BTreeMap<String, usize>,
    /// Whether unresolved K2, P1, N2, Q1 could be inferred (`true`) or not (`--no-inference`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub inference: Option<bool>,
    /// The reference station's constants file the inference relations were taken from.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub inference_reference_file: Option<String>,
    /// How the constituents were chosen: `rayleigh` (with `rayleigh_factor`) or `given`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub constituent_choice: Option<String>,
    /// The fitted trend of the mean level, metres per year (`analyse --trend`); Z0 is then the
    /// mean level at `z0_epoch_utc`, and predictions use that level without the trend.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub trend_m_per_yr: Option<f64>,
    /// Standard uncertainty of the trend, metres per year.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_trend_m_per_yr: Option<f64>,
    /// The instant Z0 is the mean level of when a trend is fitted (the record's centre), UTC.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub z0_epoch_utc: Option<String>,
    /// What the residual says about the fit.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub diagnostics: Option<DiagnosticsEntry>,
    /// The constituents.
    #[serde(rename = "constituent", default)]
    pub constituents: Vec<ConstituentEntry>,
    /// Every constituent the record could not separate from one of the analysis.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub unresolved: Vec<UnresolvedEntry>,
}

impl DiagnosticsEntry {
    fn from_analysis(a: &Analysis) -> DiagnosticsEntry {
        let d = &a.diagnostics;
        let lv = &d.level;
        DiagnosticsEntry {
            noise_floor_m: d.noise_floor_m.map(|f| round(f, UNCERTAINTY_DECIMALS)),
            lunar_day_rms_m: round(lv.rms_m, UNCERTAINTY_DECIMALS),
            fast_rms_m: round(d.fast_rms_m(a.residual_rms_m), UNCERTAINTY_DECIMALS),
            lunar_days: lv.days,
            misfit: d.misfit(a.residual_rms_m),
            step_found: lv.step_found,
            step_m: lv.step.map(|s| round(s.size_m, UNCERTAINTY_DECIMALS)),
            u_step_m: lv.step.map(|s| round(s.u_size_m, UNCERTAINTY_DECIMALS)),
            step_at_utc: lv.step.map(|s| super::timefmt::utc_time(s.at_s)),
            trend_found: lv.trend_found,
            residual_trend_m_per_yr: lv.trend.map(|t| round(t.rate_m_per_yr, 5)),
            u_residual_trend_m_per_yr: lv.trend.map(|t| round(t.u_rate_m_per_yr, 5)),
            noise_ratio_mean_level: d.noise_ratio_mean_level.map(|r| round(r, 3)),
        }
    }
}

impl ConstantsFile {
    /// The file for an analysis. Z0 and the residual RMS to 0.1 mm, amplitudes to 0.01 mm
    /// ([`AMPLITUDE_DECIMALS`]), uncertainties in metres to 0.1 mm, phases to 0.001°, times to
    /// the millisecond.
    pub fn from_analysis(
        a: &Analysis,
        source: Option<String>,
        gauge: Option<String>,
        levels: &str,
    ) -> ConstantsFile {
        let ff = a.form_factor();
        ConstantsFile {
            format: CONSTANTS_FORMAT.into(),
            source,
            gauge,
            levels: Some(levels.into()),
            z0_m: round(a.z0_m, HEIGHT_DECIMALS),
            u_z0_m: Some(round(a.u_z0_m, UNCERTAINTY_DECIMALS)),
            record_start_utc: Some(super::timefmt::utc_time(a.span_s.0)),
            record_end_utc: Some(super::timefmt::utc_time(a.span_s.1)),
            samples: Some(a.n_samples),
            nodal: Some(a.nodal.as_str().into()),
            rayleigh_factor: a.rayleigh_factor,
            residual_rms_m: Some(round(a.residual_rms_m, HEIGHT_DECIMALS)),
            variance_explained: Some(round(a.variance_explained, 6)),
            form_factor: ff.map(|f| round(f, 4)),
            tide_type: ff.map(|f| tide_type(f).to_string()),
            caution: Some(crate::CAUTION.into()),
            constituents: a
                .fitted
                .iter()
                .map(|f| ConstituentEntry {
                    name: f.constituent.name.into(),
                    // As in the constituent table (7 decimals); a compound's speed, summed from
                    // its parents', is rounded to the same.
                    speed_deg_per_h: round(f.constituent.speed_deg_per_h, 7),
                    amplitude_m: round(f.amplitude_m, AMPLITUDE_DECIMALS),
                    phase_deg: round(f.phase_deg, 3),
                    u_amplitude_m: Some(round(f.u_amplitude_m, UNCERTAINTY_DECIMALS)),
                    u_phase_deg: Some(round(f.u_phase_deg, 3)),
                    inferred_from: f.inferred_from.map(|x| x.0.to_string()),
                    inference_ratio: f.inferred_from.map(|x| round(x.1, 4)),
                    u_inference_ratio: f.inference.map(|i| round(i.u_ratio, 4)),
                    inference_phase_diff_deg: f.inference.map(|i| round(i.phase_diff_deg, 3)),
                    u_inference_phase_diff_deg: f.inference.map(|i| round(i.u_phase_diff_deg, 3)),
                    inference_basis: f.inference.map(|i| i.basis.as_str().to_string()),
                    u_amplitude_fit_m: Some(round(f.u_amplitude_fit_m, UNCERTAINTY_DECIMALS)),
                    u_phase_fit_deg: Some(round(f.u_phase_fit_deg, 3)),
                    noise_ratio: f.noise_ratio.map(|r| round(r, 3)),
                    absorbs: f
                        .absorbs
                        .iter()
                        .map(|a| a.constituent.name.to_string())
                        .collect(),
                })
                .collect(),
            short_record: a.short_record,
            tool_version: Some(format!("ebbwise {}", env!("CARGO_PKG_VERSION"))),
            record_sha256: None,
            input_time_zone: None,
            input_units: None,
            datum: None,
            zero_above_datum_m: None,
            samples_read: None,
            qc_applied: None,
            qc_set_aside: BTreeMap::new(),
            inference: None,
            inference_reference_file: None,
            constituent_choice: Some(
                if a.rayleigh_factor.is_some() {
                    "rayleigh"
                } else {
                    "given"
                }
                .into(),
            ),
            trend_m_per_yr: a.trend.map(|t| round(t.0, 5)),
            u_trend_m_per_yr: a.trend.map(|t| round(t.1, 5)),
            z0_epoch_utc: a.trend.map(|_| super::timefmt::utc_time(a.centre_s)),
            diagnostics: Some(DiagnosticsEntry::from_analysis(a)),
            unresolved: a
                .unresolved
                .iter()
                .map(|u| {
                    let expected = a
                        .fitted
                        .iter()
                        .find(|f| f.constituent.name == u.absorbed_by.name)
                        .and_then(|f| u.expected_amplitude_m(f.amplitude_m));
                    UnresolvedEntry {
                        name: u.constituent.name.into(),
                        next_to: u.next_to.name.into(),
                        absorbed_by: u.absorbed_by.name.into(),
                        expected_amplitude_m: expected.map(|e| round(e, UNCERTAINTY_DECIMALS)),
                        leakage: round(u.leakage, 3),
                    }
                })
                .collect(),
        }
    }

    /// The file with what was known of the record and of the analysis's choices besides the
    /// analysis itself.
    pub fn with_provenance(mut self, p: Provenance) -> ConstantsFile {
        self.record_sha256 = p.record_sha256;
        self.input_time_zone = Some(match p.naive_time_utc_offset {
            Some(o) => format!("each time's own UTC offset; {o} for times written without one"),
            None => "each time's own UTC offset".into(),
        });
        self.input_units = Some(p.input_units.into());
        match p.zero_above_datum_m {
            Some(z) => {
                self.datum = Some("chart datum".into());
                self.zero_above_datum_m = Some(round(z, HEIGHT_DECIMALS));
            }
            None => self.datum = Some("record zero".into()),
        }
        self.samples_read = Some(p.samples_read);
        self.qc_applied = Some(p.qc_set_aside.is_some());
        self.qc_set_aside = p.qc_set_aside.unwrap_or_default();
        self.inference = Some(p.inference);
        self.inference_reference_file = p.inference_reference_file;
        self
    }

    /// The fitted (not inferred) constituents whose constants carry an unresolved neighbour's
    /// signal expected larger than the fit's own uncertainty (or of unknown size), each with the
    /// names it absorbs: read from `absorbs` and the `[[unresolved]]` entries.
    pub fn contaminated(&self) -> Vec<(&str, Vec<&str>)> {
        self.constituents
            .iter()
            .filter(|c| c.inferred_from.is_none())
            .filter_map(|c| {
                let big: Vec<&str> = c
                    .absorbs
                    .iter()
                    .filter(|n| {
                        let e = self
                            .unresolved
                            .iter()
                            .find(|u| &u.name == *n)
                            .and_then(|u| u.expected_amplitude_m);
                        crate::compute::harmonic::absorbed_beyond_fit(e, c.u_amplitude_fit_m)
                    })
                    .map(String::as_str)
                    .collect();
                (!big.is_empty()).then_some((c.name.as_str(), big))
            })
            .collect()
    }

    /// Inference relations taken from these constants (a nearby long-term station's): for each
    /// pair (inferred, reference) of `pairs` whose two constituents the file has, both fitted
    /// (not inferred) and the reference's amplitude positive, the ratio H_i/H_r and the phase
    /// difference G_i − G_r, with standard uncertainties from the file's own u(H) and u(G)
    /// (first order: `u_ρ = ρ·√((u_Hi/H_i)² + (u_Hr/H_r)²)`, `u_Δ = √(u_Gi² + u_Gr²)`; left to
    /// the defaults for given relations when the file has none).
    pub fn inference_rules(&self, pairs: &[(&str, &str)]) -> Vec<InferenceRule> {
        let get = |n: &str| {
            let c = constituent(n)?;
            self.constituents
                .iter()
                .find(|e| constituent(&e.name).map(|x| x.name) == Some(c.name))
                .filter(|e| e.inferred_from.is_none())
        };
        let mut out = Vec::new();
        for (i, r) in pairs {
            let (Some(ei), Some(er)) = (get(i), get(r)) else {
                continue;
            };
            if er.amplitude_m.is_nan() || er.amplitude_m <= 0.0 {
                continue;
            }
            let ratio = ei.amplitude_m / er.amplitude_m;
            let u_ratio = match (ei.u_amplitude_m, er.u_amplitude_m) {
                (Some(ui), Some(ur)) if ei.amplitude_m > 0.0 => Some(
                    ratio * ((ui / ei.amplitude_m).powi(2) + (ur / er.amplitude_m).powi(2)).sqrt(),
                ),
                _ => None,
            };
            let u_phase = match (ei.u_phase_deg, er.u_phase_deg) {
                (Some(a), Some(b)) => Some(a.hypot(b)),
                _ => None,
            };
            out.push(InferenceRule {
                inferred: ei.name.clone(),
                reference: er.name.clone(),
                ratio,
                phase_diff_deg: (ei.phase_deg - er.phase_deg + 540.0).rem_euclid(360.0) - 180.0,
                u_ratio,
                u_phase_diff_deg: u_phase,
                basis: InferenceBasis::ReferenceStation,
            });
        }
        out
    }

    /// TOML text.
    pub fn to_toml(&self) -> String {
        let mut s = String::from("# Harmonic constants written by ebbwise analyse (layout described in docs/harmonics.md).\n");
        s.push_str(&toml::to_string(self).expect("constants serialise"));
        s
    }

    /// The constants for prediction, each name and speed checked against the table.
    pub fn constants(&self, path: &Path) -> Result<HarmonicConstants, IoError> {
        let at = |i: usize, f: &str| Position::file(path).field(format!("constituent[{i}].{f}"));
        if !self.z0_m.is_finite() {
            return Err(IoError::content(
                Position::file(path).field("z0_m"),
                "expected a finite number of metres",
            ));
        }
        let mut out = Vec::new();
        for (i, e) in self.constituents.iter().enumerate() {
            let c = constituent(&e.name).ok_or_else(|| {
                IoError::content(
                    at(i, "name"),
                    format!(
                        "unknown constituent '{}'{}",
                        e.name,
                        crate::compute::names::did_you_mean(
                            crate::compute::astro::nearest_constituent(&e.name)
                        )
                    ),
                )
            })?;
            if c.name == "Z0" {
                return Err(IoError::content(
                    at(i, "name"),
                    "Z0 is given by z0_m, not as a constituent",
                ));
            }
            if (e.speed_deg_per_h - c.speed_deg_per_h).abs() > 1e-6 {
                return Err(IoError::content(
                    at(i, "speed_deg_per_h"),
                    format!(
                        "{} °/h differs from {}'s speed in ebbwise's table ({} °/h): the constant was made with another definition",
                        e.speed_deg_per_h, c.name, c.speed_deg_per_h
                    ),
                ));
            }
            if !(e.amplitude_m.is_finite() && e.amplitude_m >= 0.0) {
                return Err(IoError::content(
                    at(i, "amplitude_m"),
                    format!(
                        "expected an amplitude ≥ 0 in metres, found {}",
                        e.amplitude_m
                    ),
                ));
            }
            if !e.phase_deg.is_finite() {
                return Err(IoError::content(
                    at(i, "phase_deg"),
                    "expected a finite number of degrees",
                ));
            }
            if out
                .iter()
                .any(|(x, _, _): &(&Constituent, f64, f64)| x.name == c.name)
            {
                return Err(IoError::content(
                    at(i, "name"),
                    format!("{} is given twice", c.name),
                ));
            }
            out.push((c, e.amplitude_m, e.phase_deg));
        }
        Ok(HarmonicConstants {
            z0_m: self.z0_m,
            constituents: out,
        })
    }
}

use crate::compute::astro::Constituent;

/// What the analysis knew of its record and choices beyond the analysis itself
/// ([`ConstantsFile::with_provenance`]).
#[derive(Debug, Clone, Default)]
pub struct Provenance {
    /// SHA-256 of the record file.
    pub record_sha256: Option<String>,
    /// The UTC offset given to times written without one (`+01:00`).
    pub naive_time_utc_offset: Option<String>,
    /// Units of the record's heights as written (`m`, `ft`, `us_ft`).
    pub input_units: &'static str,
    /// Height of the record's zero above chart datum, metres, when the relation is known.
    pub zero_above_datum_m: Option<f64>,
    /// Samples in the record.
    pub samples_read: usize,
    /// Samples QC set aside by flag name, `None` when QC did not run.
    pub qc_set_aside: Option<BTreeMap<String, usize>>,
    /// Whether inference was allowed.
    pub inference: bool,
    /// The reference station's constants file of `--infer-from`.
    pub inference_reference_file: Option<String>,
}

/// Reads a constants file.
pub fn read_constants(path: &Path) -> Result<(ConstantsFile, HarmonicConstants), IoError> {
    let text = std::fs::read_to_string(path).map_err(|e| IoError::file(path, e))?;
    let file: ConstantsFile =
        toml::from_str(&text).map_err(|e| IoError::from_toml(&e, &text, path))?;
    if file.format != CONSTANTS_FORMAT {
        return Err(IoError::content(
            Position::file(path).field("format"),
            format!("expected '{CONSTANTS_FORMAT}', found '{}'", file.format),
        ));
    }
    let k = file.constants(path)?;
    Ok((file, k))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::harmonic::{analyse, predict_grid, AnalysisSettings};

    #[test]
    fn written_constants_read_back_and_predict_the_same() {
        let c = |n: &str| constituent(n).unwrap();
        let k = HarmonicConstants {
            z0_m: 1.5,
            constituents: vec![
                (c("M2"), 1.1, 33.0),
                (c("S2"), 0.4, 70.0),
                (c("K1"), 0.2, 190.0),
            ],
        };
        let t0 = 1_780_000_000.0;
        let h = predict_grid(&k, t0, 3600.0, 30 * 24);
        let t: Vec<f64> = (0..h.len()).map(|i| t0 + 3600.0 * i as f64).collect();
        let a = analyse(&t, &h, &AnalysisSettings::default()).unwrap();
        let f = ConstantsFile::from_analysis(&a, Some("x.csv".into()), None, "above chart datum")
            .with_provenance(Provenance {
                record_sha256: Some("ab".repeat(32)),
                naive_time_utc_offset: Some("+01:00".into()),
                input_units: "ft",
                zero_above_datum_m: Some(-0.3),
                samples_read: h.len() + 2,
                qc_set_aside: Some(BTreeMap::from([
                    ("spike".to_string(), 1),
                    ("out_of_band".to_string(), 1),
                ])),
                inference: true,
                inference_reference_file: Some("ref.constants.toml".into()),
            });
        let text = f.to_toml();
        for key in [
            "tool_version = \"ebbwise ",
            "record_sha256 = \"abab",
            "input_time_zone = \"each time's own UTC offset; +01:00 for times written without one\"",
            "input_units = \"ft\"",
            "datum = \"chart datum\"",
            "zero_above_datum_m = -0.3",
            "qc_applied = true",
            "spike = 1",
            "inference = true",
            "inference_reference_file = \"ref.constants.toml\"",
            "constituent_choice = \"rayleigh\"",
        ] {
            assert!(text.contains(key), "{key} not in\n{text}");
        }
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("k.toml");
        std::fs::write(&p, &text).unwrap();
        let (back, kk) = read_constants(&p).unwrap();
        assert_eq!(back, f);
        let before = predict_grid(&a.constants(), t0, 3600.0, h.len());
        let again = predict_grid(&kk, t0, 3600.0, h.len());
        // Amplitudes written to 0.01 mm, Z0 to 0.1 mm and phases to 0.001°: the prediction
        // agrees within 0.1 mm.
        let worst = before
            .iter()
            .zip(&again)
            .fold(0.0f64, |m, (a, b)| m.max((a - b).abs()));
        assert!(worst < 1e-4, "{worst}");
    }

    /// A file in the layout written before the unresolved list, the fit's uncertainties and the
    /// inference relation's keys still reads, and predicts what its constants say (a
    /// hand-written file: Z0 1 m, M2 0.5 m at 0°; at a time when V + u of M2 is known the level
    /// is Z0 + f·H·cos(V + u − G)).
    #[test]
    fn files_without_the_later_keys_still_read() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("old.toml");
        std::fs::write(
            &p,
            "format = \"ebbwise-harmonic-constants/1\"\nlevels = \"above chart datum\"\nz0_m = 1.0\nu_z0_m = 0.001\nrayleigh_factor = 1.0\n\n[[constituent]]\nname = \"M2\"\nspeed_deg_per_h = 28.9841042\namplitude_m = 0.5\nphase_deg = 0.0\nu_amplitude_m = 0.001\nu_phase_deg = 0.1\n\n[[constituent]]\nname = \"N2\"\nspeed_deg_per_h = 28.4397295\namplitude_m = 0.1\nphase_deg = 0.0\nu_amplitude_m = 0.0002\nu_phase_deg = 0.1\ninferred_from = \"M2\"\ninference_ratio = 0.1915\n",
        )
        .unwrap();
        let (f, k) = read_constants(&p).unwrap();
        assert!(f.unresolved.is_empty() && !f.short_record);
        assert_eq!(f.constituents[1].inference_basis, None);
        assert_eq!(k.constituents.len(), 2);
        let t = 1_780_000_000.0;
        let a = crate::compute::astro::astro_at(t);
        let level = |c: &str, h: f64| {
            let c = constituent(c).unwrap();
            let (fc, u) = crate::compute::astro::nodal_fu(c, &a);
            fc * h
                * (crate::compute::astro::equilibrium_argument_deg(c, &a) + u)
                    .to_radians()
                    .cos()
        };
        let expected = 1.0 + level("M2", 0.5) + level("N2", 0.1);
        assert!((crate::compute::harmonic::predict_at(&k, t) - expected).abs() < 1e-12);
    }

    #[test]
    fn bad_files_are_refused_with_their_field() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("k.toml");
        let write = |body: &str| std::fs::write(&p, body).unwrap();
        write("format = \"ebbwise-harmonic-constants/1\"\nz0_m = 1.0\n[[constituent]]\nname = \"XX9\"\nspeed_deg_per_h = 1.0\namplitude_m = 0.1\nphase_deg = 0.0\n");
        let e = read_constants(&p).unwrap_err().to_string();
        assert!(
            e.contains("constituent[0].name") && e.contains("unknown constituent 'XX9'"),
            "{e}"
        );
        write("format = \"ebbwise-harmonic-constants/1\"\nz0_m = 1.0\n[[constituent]]\nname = \"SA\"\nspeed_deg_per_h = 0.0410686\namplitude_m = 0.1\nphase_deg = 0.0\n");
        let e = read_constants(&p).unwrap_err().to_string();
        assert!(
            e.contains("speed_deg_per_h") && e.contains("another definition"),
            "{e}"
        );
        write("format = \"other/1\"\nz0_m = 1.0\n");
        assert!(read_constants(&p)
            .unwrap_err()
            .to_string()
            .contains("field 'format'"));
        write("format = \"ebbwise-harmonic-constants/1\"\nz0_m = 1.0\ncolour = 3\n");
        let e = read_constants(&p).unwrap_err().to_string();
        assert!(e.contains("k.toml:3"), "{e}");
    }
}
