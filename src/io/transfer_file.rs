//! Datum-transfer files (TOML, layout `ebbwise-datum-transfer/1`), written by `ebbwise transfer`.
//!
//! The file holds a short-term (subordinate) gauge's datum relation found by simultaneous
//! comparison with a control gauge (docs/datums-computation.md, "Transfer"): the two top-level
//! keys `zero_above_datum_m` and `u_zero_above_datum_m` are the result, by the method `method`.
//! Every level is a height in metres, positive up, on the **subordinate's zero** unless its name
//! says otherwise; `u_` is a standard uncertainty. Layout:
//!
//! ```toml
//! format = "ebbwise-datum-transfer/1"
//! subordinate = "ferrisk"            # the gauge id, or the record's file stem
//! control = "orlick"
//! method = "modified_range_ratio"    # or "direct_level": the method of the result
//! method_chosen_by = "…"             # the default's reason, or "--method"
//! zero_above_datum_m = -0.6312       # the subordinate's zero above chart datum
//! u_zero_above_datum_m = 0.0318
//! control_zero_above_datum_m = -0.85 # the control's zero above chart datum (its datums file)
//! u_control_datum_m = 0.03           # the standard uncertainty of chart datum at the control
//! common_start_utc = "…"             # the records' overlap
//! common_end_utc = "…"
//! days_start_utc = "…"               # the paired complete tidal days
//! days_end_utc = "…"
//! tidal_days = 29
//! min_tidal_days = 15
//! uncertainty_model = "…"
//! tool_version = "ebbwise 0.1.0"
//! caution = "…"
//!
//! [inputs]                           # each input as given and its SHA-256
//! subordinate_record = "…"
//! subordinate_record_sha256 = "…"
//! control_record = "…"
//! control_record_sha256 = "…"
//! control_datums = "…"
//! control_datums_sha256 = "…"
//! project = "…"                      # with --project
//! project_sha256 = "…"
//!
//! [period.subordinate]               # means over the paired days, on the subordinate's zero
//! mhw_m = …                          # and mlw_m, mhhw_m, mllw_m, msl_m, mtl_m, dtl_m, mn_m, gt_m
//! [period.control]                   # the same, on the control's zero
//! [period.ratios]
//! mn_ratio = 1.2194                  # MN'_s / MN'_c, with u_mn_ratio; gt_ratio, u_gt_ratio
//!
//! [modified_range_ratio]             # the subordinate's datums by each method, on its zero:
//! mhw_m = …                          # mhw_m, u_mhw_m, … msl_m, u_msl_m, chart_datum_m,
//! [direct_level]                     # u_chart_datum_m, zero_above_datum_m, u_zero_above_datum_m
//! [difference]                       # modified_range_ratio − direct_level, the same names
//! ```

use serde::Serialize;

use super::numfmt::{round_to, HEIGHT_DECIMALS, UNCERTAINTY_DECIMALS};
use crate::compute::transfer::{Comparison, Method, SubordinateDatums, TidalMeans, Transferred};

/// Layout name.
pub const TRANSFER_FORMAT: &str = "ebbwise-datum-transfer/1";

/// Decimals of a range ratio and its uncertainty.
pub const RATIO_DECIMALS: u32 = 5;

/// The uncertainty model, in words (written in every file).
pub const TRANSFER_UNCERTAINTY_MODEL: &str = "first-order propagation of independent inputs: the control's long-term datums (their u_m in its datums file) and chart datum at the control (u_control_datum_m); each difference of period means subordinate - control with u = sd(day differences) * sqrt((1 + rho)/((1 - rho) n)), rho their lag-one autocorrelation clamped to [0, 0.9], n the paired tidal days; each range ratio likewise from its day residuals; not included: correlation between the differences, a departure of the period from the long term that the two places do not share, the subordinate zero's own stability";

/// The name of a method as written.
pub fn method_name(m: Method) -> &'static str {
    match m {
        Method::ModifiedRangeRatio => "modified_range_ratio",
        Method::DirectLevel => "direct_level",
    }
}

/// Period means of one gauge as written (metres on its zero).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct PeriodMeans {
    /// Mean high water.
    pub mhw_m: f64,
    /// Mean low water.
    pub mlw_m: f64,
    /// Mean higher high water.
    pub mhhw_m: f64,
    /// Mean lower low water.
    pub mllw_m: f64,
    /// Mean sea level.
    pub msl_m: f64,
    /// Mean tide level.
    pub mtl_m: f64,
    /// Diurnal tide level.
    pub dtl_m: f64,
    /// Mean range.
    pub mn_m: f64,
    /// Great diurnal range.
    pub gt_m: f64,
}

impl PeriodMeans {
    fn of(t: &TidalMeans) -> Self {
        let h = |v: f64| round_to(v, HEIGHT_DECIMALS);
        PeriodMeans {
            mhw_m: h(t.mhw_m),
            mlw_m: h(t.mlw_m),
            mhhw_m: h(t.mhhw_m),
            mllw_m: h(t.mllw_m),
            msl_m: h(t.msl_m),
            mtl_m: h(t.mtl_m()),
            dtl_m: h(t.dtl_m()),
            mn_m: h(t.mn_m()),
            gt_m: h(t.gt_m()),
        }
    }
}

/// The range ratios over the common period.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Ratios {
    /// MN'_s / MN'_c.
    pub mn_ratio: f64,
    /// Its standard uncertainty.
    pub u_mn_ratio: f64,
    /// GT'_s / GT'_c.
    pub gt_ratio: f64,
    /// Its standard uncertainty.
    pub u_gt_ratio: f64,
}

/// The period means of both gauges and their range ratios.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Period {
    /// The subordinate's, on its zero.
    pub subordinate: PeriodMeans,
    /// The control's, on its zero.
    pub control: PeriodMeans,
    /// The range ratios.
    pub ratios: Ratios,
}

/// The subordinate's datums by one method (or the difference of two), metres on its zero.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct MethodDatums {
    /// Mean high water.
    pub mhw_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_mhw_m: Option<f64>,
    /// Mean low water.
    pub mlw_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_mlw_m: Option<f64>,
    /// Mean higher high water.
    pub mhhw_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_mhhw_m: Option<f64>,
    /// Mean lower low water.
    pub mllw_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_mllw_m: Option<f64>,
    /// Mean tide level.
    pub mtl_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_mtl_m: Option<f64>,
    /// Diurnal tide level.
    pub dtl_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_dtl_m: Option<f64>,
    /// Mean range.
    pub mn_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_mn_m: Option<f64>,
    /// Great diurnal range.
    pub gt_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_gt_m: Option<f64>,
    /// Mean sea level.
    pub msl_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_msl_m: Option<f64>,
    /// Chart datum as a height on the subordinate's zero.
    pub chart_datum_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_chart_datum_m: Option<f64>,
    /// The subordinate's zero above chart datum.
    pub zero_above_datum_m: f64,
    /// Its standard uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub u_zero_above_datum_m: Option<f64>,
}

impl MethodDatums {
    fn all(d: &SubordinateDatums) -> [Transferred; 11] {
        [
            d.mhw,
            d.mlw,
            d.mhhw,
            d.mllw,
            d.mtl,
            d.dtl,
            d.mn,
            d.gt,
            d.msl,
            d.chart_datum,
            d.zero_above_chart_datum,
        ]
    }

    fn from_values(v: [f64; 11], u: Option<[f64; 11]>) -> Self {
        let h = |x: f64| round_to(x, HEIGHT_DECIMALS);
        let uu = |k: usize| u.map(|u| round_to(u[k], UNCERTAINTY_DECIMALS));
        MethodDatums {
            mhw_m: h(v[0]),
            u_mhw_m: uu(0),
            mlw_m: h(v[1]),
            u_mlw_m: uu(1),
            mhhw_m: h(v[2]),
            u_mhhw_m: uu(2),
            mllw_m: h(v[3]),
            u_mllw_m: uu(3),
            mtl_m: h(v[4]),
            u_mtl_m: uu(4),
            dtl_m: h(v[5]),
            u_dtl_m: uu(5),
            mn_m: h(v[6]),
            u_mn_m: uu(6),
            gt_m: h(v[7]),
            u_gt_m: uu(7),
            msl_m: h(v[8]),
            u_msl_m: uu(8),
            chart_datum_m: h(v[9]),
            u_chart_datum_m: uu(9),
            zero_above_datum_m: h(v[10]),
            u_zero_above_datum_m: uu(10),
        }
    }

    /// One method's datums with their uncertainties.
    pub fn of(d: &SubordinateDatums) -> Self {
        let a = Self::all(d);
        Self::from_values(a.map(|t| t.value_m), Some(a.map(|t| t.u_m)))
    }

    /// `a − b`, values only.
    pub fn difference(a: &SubordinateDatums, b: &SubordinateDatums) -> Self {
        let (x, y) = (Self::all(a), Self::all(b));
        let mut v = [0.0; 11];
        for k in 0..11 {
            v[k] = x[k].value_m - y[k].value_m;
        }
        Self::from_values(v, None)
    }
}

/// The inputs as given, with their SHA-256.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Inputs {
    /// The subordinate's record.
    pub subordinate_record: String,
    /// Its SHA-256, lowercase hex.
    pub subordinate_record_sha256: String,
    /// The control's record.
    pub control_record: String,
    /// Its SHA-256.
    pub control_record_sha256: String,
    /// The control's datums file.
    pub control_datums: String,
    /// Its SHA-256.
    pub control_datums_sha256: String,
    /// The project file, with `--project`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub project: Option<String>,
    /// Its SHA-256.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub project_sha256: Option<String>,
}

/// A datum-transfer file as written.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct TransferFile {
    /// Layout name, [`TRANSFER_FORMAT`].
    pub format: String,
    /// The subordinate's id (or its record's file stem).
    pub subordinate: String,
    /// The control's id (or its record's file stem).
    pub control: String,
    /// The method of the result ([`method_name`]).
    pub method: String,
    /// Why that method.
    pub method_chosen_by: String,
    /// The result: the subordinate's zero above chart datum, metres.
    pub zero_above_datum_m: f64,
    /// Its standard uncertainty, metres.
    pub u_zero_above_datum_m: f64,
    /// The control's zero above chart datum (from its datums file), metres.
    pub control_zero_above_datum_m: f64,
    /// Standard uncertainty of chart datum at the control, metres.
    pub u_control_datum_m: f64,
    /// Start of the records' overlap, UTC.
    pub common_start_utc: String,
    /// End of the records' overlap, UTC.
    pub common_end_utc: String,
    /// Start of the first paired tidal day, UTC.
    pub days_start_utc: String,
    /// End of the last paired tidal day, UTC.
    pub days_end_utc: String,
    /// Paired complete tidal days.
    pub tidal_days: usize,
    /// The fewest accepted.
    pub min_tidal_days: usize,
    /// The uncertainty model, in words.
    pub uncertainty_model: String,
    /// The program, `ebbwise <version>`.
    pub tool_version: String,
    /// The caution.
    pub caution: String,
    /// The inputs.
    pub inputs: Inputs,
    /// The period means and ratios.
    pub period: Period,
    /// The modified-range-ratio method's datums.
    pub modified_range_ratio: MethodDatums,
    /// The direct method's datums.
    pub direct_level: MethodDatums,
    /// Modified range ratio − direct level.
    pub difference: MethodDatums,
}

/// What the file records besides the two transfers and the comparison.
#[derive(Debug, Clone)]
pub struct TransferProvenance {
    /// The subordinate's id.
    pub subordinate: String,
    /// The control's id.
    pub control: String,
    /// The method of the result.
    pub method: Method,
    /// Why that method, in words.
    pub method_chosen_by: String,
    /// The control's zero above chart datum, metres.
    pub control_zero_above_datum_m: f64,
    /// Standard uncertainty of chart datum at the control, metres.
    pub u_control_datum_m: f64,
    /// The records' overlap, UTC seconds.
    pub common_s: (f64, f64),
    /// The paired days' span, UTC seconds.
    pub days_s: (f64, f64),
    /// The fewest tidal days accepted.
    pub min_tidal_days: usize,
    /// The inputs.
    pub inputs: Inputs,
}

impl TransferFile {
    /// The file; heights and uncertainties to 0.1 mm, ratios to 1e-5, times to the millisecond.
    pub fn new(
        cmp: &Comparison,
        mrr: &SubordinateDatums,
        direct: &SubordinateDatums,
        p: TransferProvenance,
    ) -> TransferFile {
        let utc = |t: f64| super::timefmt::utc_time((t * 1000.0).round() / 1000.0);
        let chosen = match p.method {
            Method::ModifiedRangeRatio => mrr,
            Method::DirectLevel => direct,
        };
        let r = |v: f64| round_to(v, RATIO_DECIMALS);
        TransferFile {
            format: TRANSFER_FORMAT.into(),
            subordinate: p.subordinate,
            control: p.control,
            method: method_name(p.method).into(),
            method_chosen_by: p.method_chosen_by,
            zero_above_datum_m: round_to(chosen.zero_above_chart_datum.value_m, HEIGHT_DECIMALS),
            u_zero_above_datum_m: round_to(chosen.zero_above_chart_datum.u_m, UNCERTAINTY_DECIMALS),
            control_zero_above_datum_m: round_to(p.control_zero_above_datum_m, HEIGHT_DECIMALS),
            u_control_datum_m: round_to(p.u_control_datum_m, UNCERTAINTY_DECIMALS),
            common_start_utc: utc(p.common_s.0),
            common_end_utc: utc(p.common_s.1),
            days_start_utc: utc(p.days_s.0),
            days_end_utc: utc(p.days_s.1),
            tidal_days: cmp.days,
            min_tidal_days: p.min_tidal_days,
            uncertainty_model: TRANSFER_UNCERTAINTY_MODEL.into(),
            tool_version: format!("ebbwise {}", env!("CARGO_PKG_VERSION")),
            caution: crate::CAUTION.into(),
            inputs: p.inputs,
            period: Period {
                subordinate: PeriodMeans::of(&cmp.subordinate),
                control: PeriodMeans::of(&cmp.control),
                ratios: Ratios {
                    mn_ratio: r(cmp.subordinate.mn_m() / cmp.control.mn_m()),
                    u_mn_ratio: r(cmp.u.u_ratio_mn),
                    gt_ratio: r(cmp.subordinate.gt_m() / cmp.control.gt_m()),
                    u_gt_ratio: r(cmp.u.u_ratio_gt),
                },
            },
            modified_range_ratio: MethodDatums::of(mrr),
            direct_level: MethodDatums::of(direct),
            difference: MethodDatums::difference(mrr, direct),
        }
    }

    /// TOML text.
    pub fn to_toml(&self) -> String {
        let mut s = String::from(
            "# Datum transfer written by ebbwise transfer (layout described in docs/datums-computation.md).\n",
        );
        s.push_str(&toml::to_string(self).expect("a transfer file serialises"));
        s
    }
}
