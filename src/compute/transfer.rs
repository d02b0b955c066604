//! Datum transfer from a short-term (subordinate) gauge to its long-term datums, by simultaneous
//! comparison with a control gauge whose long-term datums are known.
//!
//! Methods (NOAA CO-OPS, *Computational Techniques for Tidal Datums Handbook*, NOAA Special
//! Publication NOS CO-OPS 2, 2003; DOMAIN §6). Primes are means over the common period, `s` the
//! subordinate, `c` the control:
//!
//! * **Modified-range ratio** ([`Method::ModifiedRangeRatio`]):
//!   `MTL_s = MTL'_s + (MTL_c − MTL'_c)`, `MN_s = MN'_s · MN_c / MN'_c`, `MLW_s = MTL_s − MN_s/2`,
//!   `MHW_s = MLW_s + MN_s`; likewise `DTL_s`, `GT_s`, `MLLW_s = DTL_s − GT_s/2`,
//!   `MHHW_s = MLLW_s + GT_s`; `MSL_s = MSL'_s + (MSL_c − MSL'_c)`.
//! * **Direct level transfer** ([`Method::DirectLevel`]): every datum `D_s = D'_s + (D_c − D'_c)`
//!   (MTL, MN, DTL and GT too, each from its own period means).
//!
//! **Chart datum.** The control's chart datum (e.g. its LAT or MLLW) is given as a height on the
//! control's zero. It is carried to the subordinate as a separation below MLLW, scaled by the
//! great-diurnal range ratio in the range-ratio method and unscaled in the direct method:
//! `CD_s = MLLW_s − (MLLW_c − CD_c)·GT_s/GT_c` resp. `CD_s = CD_c + (MLLW'_s − MLLW'_c)` (so a
//! chart datum at MLLW stays at MLLW; a datum below it keeps its depth in proportion to the tide,
//! common practice for tide-defined chart datums). The subordinate's zero then lies
//! `−CD_s` above chart datum.
//!
//! # Uncertainty
//!
//! Each transferred datum gets a standard uncertainty from independent inputs (GUM, first-order
//! propagation with sensitivities by central differences; the functions are linear or bilinear):
//!
//! * the control's long-term datums (their own `u`, given, taken as independent);
//! * for each difference `Δ = X'_s − X'_c` of period means, the uncertainty of the mean of the
//!   tidal-day differences `d_i = X_s,i − X_c,i`: `u(Δ) = σ_d·√(τ/T)` with σ_d the standard
//!   deviation of the `d_i`, T the common period (n tidal days) and τ the integral time scale of a
//!   first-order autoregressive process with the lag-one autocorrelation ρ of the `d_i`:
//!   `τ/T = (1 + ρ)/((1 − ρ)·n)` (effective sample size `n(1 − ρ)/(1 + ρ)`, ρ clamped to
//!   [0, 0.9]; common practice for serially correlated means, e.g. Bretherton et al. 1999,
//!   *J. Climate* 12 — from memory). What the two places do differently day by day (their
//!   distance and dissimilarity) is in σ_d; a longer common period shrinks `u` as `1/√T`;
//! * for each range ratio `r = MN'_s / MN'_c`, the same model on the residuals
//!   `e_i = MN_s,i − r·MN_c,i` (whose mean is zero): `u(r) = u(mean e)/MN'_c`.
//!
//! The differences and ratios are taken as independent of each other (their correlation over the
//! common period is not modelled), and the period's departure from the long term is assumed
//! common to both gauges: only its difference is in the budget.

use crate::compute::extrema::{Tabulation, TIDAL_DAY_S};

/// Fewest tidal days a comparison accepts (a standard deviation and an autocorrelation need
/// three).
pub const MIN_DAYS: usize = 3;
/// Largest lag-one autocorrelation used in the effective sample size.
pub const MAX_RHO: f64 = 0.9;

/// Tidal means of one gauge, metres on that gauge's zero: over one tidal day, over a common
/// period (the primes) or long-term (the datums).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TidalMeans {
    /// Mean high water (of a tidal day: the mean of its high waters).
    pub mhw_m: f64,
    /// Mean low water.
    pub mlw_m: f64,
    /// Mean higher high water (of a tidal day: its higher high water).
    pub mhhw_m: f64,
    /// Mean lower low water (of a tidal day: its lower low water).
    pub mllw_m: f64,
    /// Mean sea level (of a tidal day: the mean of its levels).
    pub msl_m: f64,
}

impl TidalMeans {
    /// Mean tide level (MHW + MLW)/2.
    pub fn mtl_m(&self) -> f64 {
        0.5 * (self.mhw_m + self.mlw_m)
    }
    /// Mean range MHW − MLW.
    pub fn mn_m(&self) -> f64 {
        self.mhw_m - self.mlw_m
    }
    /// Diurnal tide level (MHHW + MLLW)/2.
    pub fn dtl_m(&self) -> f64 {
        0.5 * (self.mhhw_m + self.mllw_m)
    }
    /// Great diurnal range MHHW − MLLW.
    pub fn gt_m(&self) -> f64 {
        self.mhhw_m - self.mllw_m
    }
    fn all_finite(&self) -> bool {
        [self.mhw_m, self.mlw_m, self.mhhw_m, self.mllw_m, self.msl_m]
            .iter()
            .all(|v| v.is_finite())
    }
}

/// Standard uncertainties of the period-mean differences (subordinate − control), metres.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DifferenceUncertainty {
    /// u(MHW'_s − MHW'_c).
    pub u_mhw_m: f64,
    /// u(MLW'_s − MLW'_c).
    pub u_mlw_m: f64,
    /// u(MHHW'_s − MHHW'_c).
    pub u_mhhw_m: f64,
    /// u(MLLW'_s − MLLW'_c).
    pub u_mllw_m: f64,
    /// u(MSL'_s − MSL'_c).
    pub u_msl_m: f64,
    /// u(MTL'_s − MTL'_c).
    pub u_mtl_m: f64,
    /// u(DTL'_s − DTL'_c).
    pub u_dtl_m: f64,
    /// u(MN'_s − MN'_c).
    pub u_mn_m: f64,
    /// u(GT'_s − GT'_c).
    pub u_gt_m: f64,
    /// u(MN'_s / MN'_c), dimensionless.
    pub u_ratio_mn: f64,
    /// u(GT'_s / GT'_c), dimensionless.
    pub u_ratio_gt: f64,
}

/// The two gauges over their common period: period means and the uncertainties of their
/// differences and range ratios.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Comparison {
    /// The subordinate's period means (primes), on its zero.
    pub subordinate: TidalMeans,
    /// The control's period means (primes), on its zero.
    pub control: TidalMeans,
    /// Tidal days in the common period.
    pub days: usize,
    /// Uncertainties of the differences and ratios.
    pub u: DifferenceUncertainty,
}

/// The control's long-term datums and chart datum, on the control's zero.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ControlDatums {
    /// Long-term MHW, MLW, MHHW, MLLW, MSL.
    pub datums: TidalMeans,
    /// Their standard uncertainties (taken as independent).
    pub u: TidalMeans,
    /// Chart datum (e.g. LAT or MLLW) as a height on the control's zero.
    pub chart_datum_m: f64,
    /// Its standard uncertainty.
    pub u_chart_datum_m: f64,
}

/// Which transfer.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Modified-range ratio (semidiurnal and mixed tides).
    ModifiedRangeRatio,
    /// Direct level transfer (diurnal or weakly tidal places).
    DirectLevel,
}

/// A transferred value with its standard uncertainty, metres.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Transferred {
    /// Value, metres (a height on the subordinate's zero, or a range).
    pub value_m: f64,
    /// Standard uncertainty, metres.
    pub u_m: f64,
}

/// The subordinate gauge's long-term datums on its zero, and its datum relation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SubordinateDatums {
    /// The method used.
    pub method: Method,
    /// Mean high water.
    pub mhw: Transferred,
    /// Mean low water.
    pub mlw: Transferred,
    /// Mean tide level.
    pub mtl: Transferred,
    /// Mean range.
    pub mn: Transferred,
    /// Mean higher high water.
    pub mhhw: Transferred,
    /// Mean lower low water.
    pub mllw: Transferred,
    /// Diurnal tide level.
    pub dtl: Transferred,
    /// Great diurnal range.
    pub gt: Transferred,
    /// Mean sea level.
    pub msl: Transferred,
    /// Chart datum as a height on the subordinate's zero.
    pub chart_datum: Transferred,
    /// The subordinate's zero above chart datum (−chart datum).
    pub zero_above_chart_datum: Transferred,
}

/// Why a comparison or transfer cannot be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum TransferError {
    /// The two gauges have different numbers of tidal days.
    #[error("the subordinate has {subordinate} tidal days and the control {control}: the common period must pair them")]
    DayCountMismatch {
        /// Subordinate's tidal days.
        subordinate: usize,
        /// Control's tidal days.
        control: usize,
    },
    /// Fewer tidal days than [`MIN_DAYS`].
    #[error("{days} tidal days in the common period, fewer than {min}")]
    TooFewDays {
        /// Tidal days given.
        days: usize,
        /// Fewest accepted.
        min: usize,
    },
    /// A tidal-day value is not finite.
    #[error("tidal day {day} of the {gauge} has a non-finite value")]
    NotFinite {
        /// Index of the tidal day (from 0).
        day: usize,
        /// "subordinate" or "control".
        gauge: &'static str,
    },
    /// A range over the common period or at the control is not positive.
    #[error("the {which} is not positive ({value_m} m): no range ratio")]
    NoRange {
        /// Which range.
        which: &'static str,
        /// Its value, metres.
        value_m: f64,
    },
    /// A control datum or uncertainty is not finite, or an uncertainty is negative.
    #[error("the control's datums or their uncertainties are not finite and non-negative")]
    BadControl,
}

/// Mean, and standard uncertainty of the mean under the AR(1) model (module documentation).
fn mean_and_u(d: &[f64]) -> (f64, f64) {
    let n = d.len() as f64;
    let mean = d.iter().sum::<f64>() / n;
    let ss: f64 = d.iter().map(|x| (x - mean).powi(2)).sum();
    let var = ss / (n - 1.0);
    let rho = if ss > 0.0 {
        let c1: f64 = d.windows(2).map(|w| (w[0] - mean) * (w[1] - mean)).sum();
        (c1 / ss).clamp(0.0, MAX_RHO)
    } else {
        0.0
    };
    (mean, (var * (1.0 + rho) / ((1.0 - rho) * n)).sqrt())
}

/// Compares the two gauges over their common period from paired tidal-day values (the same
/// tidal days, in order): period means (the mean of the tidal-day values) and the uncertainties
/// of their differences and range ratios (module documentation).
pub fn compare_tidal_days(
    subordinate: &[TidalMeans],
    control: &[TidalMeans],
) -> Result<Comparison, TransferError> {
    if subordinate.len() != control.len() {
        return Err(TransferError::DayCountMismatch {
            subordinate: subordinate.len(),
            control: control.len(),
        });
    }
    let n = subordinate.len();
    if n < MIN_DAYS {
        return Err(TransferError::TooFewDays {
            days: n,
            min: MIN_DAYS,
        });
    }
    for (i, (s, c)) in subordinate.iter().zip(control).enumerate() {
        if !s.all_finite() {
            return Err(TransferError::NotFinite {
                day: i,
                gauge: "subordinate",
            });
        }
        if !c.all_finite() {
            return Err(TransferError::NotFinite {
                day: i,
                gauge: "control",
            });
        }
    }
    let mean_of = |v: &[TidalMeans], f: fn(&TidalMeans) -> f64| -> f64 {
        v.iter().map(f).sum::<f64>() / n as f64
    };
    let means = |v: &[TidalMeans]| TidalMeans {
        mhw_m: mean_of(v, |x| x.mhw_m),
        mlw_m: mean_of(v, |x| x.mlw_m),
        mhhw_m: mean_of(v, |x| x.mhhw_m),
        mllw_m: mean_of(v, |x| x.mllw_m),
        msl_m: mean_of(v, |x| x.msl_m),
    };
    let (sp, cp) = (means(subordinate), means(control));
    for (which, value_m) in [
        ("control's mean range over the common period", cp.mn_m()),
        (
            "control's great diurnal range over the common period",
            cp.gt_m(),
        ),
    ] {
        if value_m.is_nan() || value_m <= 0.0 {
            return Err(TransferError::NoRange { which, value_m });
        }
    }
    let u_diff = |f: fn(&TidalMeans) -> f64| -> f64 {
        let d: Vec<f64> = subordinate
            .iter()
            .zip(control)
            .map(|(s, c)| f(s) - f(c))
            .collect();
        mean_and_u(&d).1
    };
    let u_ratio = |f: fn(&TidalMeans) -> f64, r: f64, range_c: f64| -> f64 {
        let e: Vec<f64> = subordinate
            .iter()
            .zip(control)
            .map(|(s, c)| f(s) - r * f(c))
            .collect();
        mean_and_u(&e).1 / range_c
    };
    let r_mn = sp.mn_m() / cp.mn_m();
    let r_gt = sp.gt_m() / cp.gt_m();
    Ok(Comparison {
        subordinate: sp,
        control: cp,
        days: n,
        u: DifferenceUncertainty {
            u_mhw_m: u_diff(|x| x.mhw_m),
            u_mlw_m: u_diff(|x| x.mlw_m),
            u_mhhw_m: u_diff(|x| x.mhhw_m),
            u_mllw_m: u_diff(|x| x.mllw_m),
            u_msl_m: u_diff(|x| x.msl_m),
            u_mtl_m: u_diff(TidalMeans::mtl_m),
            u_dtl_m: u_diff(TidalMeans::dtl_m),
            u_mn_m: u_diff(TidalMeans::mn_m),
            u_gt_m: u_diff(TidalMeans::gt_m),
            u_ratio_mn: u_ratio(TidalMeans::mn_m, r_mn, cp.mn_m()),
            u_ratio_gt: u_ratio(TidalMeans::gt_m, r_gt, cp.gt_m()),
        },
    })
}

/// The independent inputs of a transfer (module documentation), in a fixed order.
const N_INPUTS: usize = 17;
#[derive(Clone, Copy)]
enum In {
    MhwC,
    MlwC,
    MhhwC,
    MllwC,
    MslC,
    CdC,
    DMhw,
    DMlw,
    DMhhw,
    DMllw,
    DMsl,
    DMtl,
    DDtl,
    DMn,
    DGt,
    RMn,
    RGt,
}

/// The transferred values (MHW, MLW, MTL, MN, MHHW, MLLW, DTL, GT, MSL, CD) from the inputs.
fn evaluate(x: &[f64; N_INPUTS], method: Method) -> [f64; 10] {
    let g = |i: In| x[i as usize];
    let mtl_c = 0.5 * (g(In::MhwC) + g(In::MlwC));
    let mn_c = g(In::MhwC) - g(In::MlwC);
    let dtl_c = 0.5 * (g(In::MhhwC) + g(In::MllwC));
    let gt_c = g(In::MhhwC) - g(In::MllwC);
    let msl = g(In::MslC) + g(In::DMsl);
    match method {
        Method::ModifiedRangeRatio => {
            let mtl = mtl_c + g(In::DMtl);
            let mn = g(In::RMn) * mn_c;
            let mlw = mtl - 0.5 * mn;
            let mhw = mlw + mn;
            let dtl = dtl_c + g(In::DDtl);
            let gt = g(In::RGt) * gt_c;
            let mllw = dtl - 0.5 * gt;
            let mhhw = mllw + gt;
            let cd = mllw - (g(In::MllwC) - g(In::CdC)) * g(In::RGt);
            [mhw, mlw, mtl, mn, mhhw, mllw, dtl, gt, msl, cd]
        }
        Method::DirectLevel => {
            let mhw = g(In::MhwC) + g(In::DMhw);
            let mlw = g(In::MlwC) + g(In::DMlw);
            let mhhw = g(In::MhhwC) + g(In::DMhhw);
            let mllw = g(In::MllwC) + g(In::DMllw);
            let mtl = mtl_c + g(In::DMtl);
            let mn = mn_c + g(In::DMn);
            let dtl = dtl_c + g(In::DDtl);
            let gt = gt_c + g(In::DGt);
            let cd = g(In::CdC) + g(In::DMllw);
            [mhw, mlw, mtl, mn, mhhw, mllw, dtl, gt, msl, cd]
        }
    }
}

/// The subordinate's long-term datums and datum relation by `method` (module documentation).
pub fn transfer(
    cmp: &Comparison,
    control: &ControlDatums,
    method: Method,
) -> Result<SubordinateDatums, TransferError> {
    let (d, u) = (&control.datums, &control.u);
    let finite = d.all_finite()
        && u.all_finite()
        && control.chart_datum_m.is_finite()
        && control.u_chart_datum_m.is_finite()
        && [
            u.mhw_m,
            u.mlw_m,
            u.mhhw_m,
            u.mllw_m,
            u.msl_m,
            control.u_chart_datum_m,
        ]
        .iter()
        .all(|&v| v >= 0.0);
    if !finite {
        return Err(TransferError::BadControl);
    }
    for (which, value_m) in [
        ("control's long-term mean range", d.mn_m()),
        ("control's long-term great diurnal range", d.gt_m()),
    ] {
        if value_m.is_nan() || value_m <= 0.0 {
            return Err(TransferError::NoRange { which, value_m });
        }
    }
    let (sp, cp) = (&cmp.subordinate, &cmp.control);
    let x: [f64; N_INPUTS] = [
        d.mhw_m,
        d.mlw_m,
        d.mhhw_m,
        d.mllw_m,
        d.msl_m,
        control.chart_datum_m,
        sp.mhw_m - cp.mhw_m,
        sp.mlw_m - cp.mlw_m,
        sp.mhhw_m - cp.mhhw_m,
        sp.mllw_m - cp.mllw_m,
        sp.msl_m - cp.msl_m,
        sp.mtl_m() - cp.mtl_m(),
        sp.dtl_m() - cp.dtl_m(),
        sp.mn_m() - cp.mn_m(),
        sp.gt_m() - cp.gt_m(),
        sp.mn_m() / cp.mn_m(),
        sp.gt_m() / cp.gt_m(),
    ];
    let cu = &cmp.u;
    let ux: [f64; N_INPUTS] = [
        u.mhw_m,
        u.mlw_m,
        u.mhhw_m,
        u.mllw_m,
        u.msl_m,
        control.u_chart_datum_m,
        cu.u_mhw_m,
        cu.u_mlw_m,
        cu.u_mhhw_m,
        cu.u_mllw_m,
        cu.u_msl_m,
        cu.u_mtl_m,
        cu.u_dtl_m,
        cu.u_mn_m,
        cu.u_gt_m,
        cu.u_ratio_mn,
        cu.u_ratio_gt,
    ];
    let v = evaluate(&x, method);
    // u² = Σ (∂y/∂x_i · u_i)², the sensitivities by central differences (exact for the linear and
    // bilinear functions here, to rounding).
    let mut var = [0.0_f64; 10];
    for i in 0..N_INPUTS {
        if ux[i] == 0.0 {
            continue;
        }
        let h = 1e-3 * x[i].abs().max(1.0);
        let (mut xp, mut xm) = (x, x);
        xp[i] += h;
        xm[i] -= h;
        let (yp, ym) = (evaluate(&xp, method), evaluate(&xm, method));
        for k in 0..10 {
            let c = (yp[k] - ym[k]) / (2.0 * h);
            var[k] += (c * ux[i]).powi(2);
        }
    }
    let t = |k: usize| Transferred {
        value_m: v[k],
        u_m: var[k].sqrt(),
    };
    let cd = t(9);
    Ok(SubordinateDatums {
        method,
        mhw: t(0),
        mlw: t(1),
        mtl: t(2),
        mn: t(3),
        mhhw: t(4),
        mllw: t(5),
        dtl: t(6),
        gt: t(7),
        msl: t(8),
        chart_datum: cd,
        zero_above_chart_datum: Transferred {
            value_m: -cd.value_m,
            u_m: cd.u_m,
        },
    })
}

/// One complete tidal day of a tabulated record, as a comparison uses it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DayValues {
    /// Start of the tidal day, UTC seconds.
    pub start_s: f64,
    /// The day's values: mean of its high (low) waters, its highest high and lowest low water,
    /// its mean level; metres on the record's zero.
    pub means: TidalMeans,
    /// High waters in the day.
    pub high_waters: usize,
    /// Low waters in the day.
    pub low_waters: usize,
}

/// The complete tidal days of a tabulation that hold at least one high and one low water, in
/// time order, with their values (the definitions of [`crate::compute::datums`]: a day with a
/// single high water counts it as its higher high water).
pub fn day_values(tab: &Tabulation) -> Vec<DayValues> {
    let mut out = Vec::new();
    for (i, d) in tab.days.iter().enumerate() {
        let Some(msl_m) = d.mean_level_m else {
            continue;
        };
        let (mut hw, mut lw) = (Vec::new(), Vec::new());
        for e in tab.extrema.iter().filter(|e| e.day == i) {
            if e.water.high {
                hw.push(e.water.height_m);
            } else {
                lw.push(e.water.height_m);
            }
        }
        if hw.is_empty() || lw.is_empty() {
            continue;
        }
        let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
        out.push(DayValues {
            start_s: d.start_s,
            means: TidalMeans {
                mhw_m: mean(&hw),
                mlw_m: mean(&lw),
                mhhw_m: hw.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                mllw_m: lw.iter().copied().fold(f64::INFINITY, f64::min),
                msl_m,
            },
            high_waters: hw.len(),
            low_waters: lw.len(),
        });
    }
    out
}

/// The subordinate's time difference from the control, seconds (positive: its tide comes
/// later): the median, over the subordinate's high and low waters, of the time from the nearest
/// control turning point of the same kind within a quarter of a tidal day (6.2 h). `None` when
/// no turning point has a partner.
pub fn time_difference_s(subordinate: &Tabulation, control: &Tabulation) -> Option<f64> {
    let quarter = 0.25 * TIDAL_DAY_S;
    let mut d: Vec<f64> = subordinate
        .extrema
        .iter()
        .filter_map(|e| {
            control
                .extrema
                .iter()
                .filter(|c| c.water.high == e.water.high)
                .map(|c| e.water.t_s - c.water.t_s)
                .filter(|x| x.abs() < quarter)
                .min_by(|a, b| a.abs().total_cmp(&b.abs()))
        })
        .collect();
    if d.is_empty() {
        return None;
    }
    d.sort_by(f64::total_cmp);
    let n = d.len();
    Some(if n % 2 == 1 {
        d[n / 2]
    } else {
        0.5 * (d[n / 2 - 1] + d[n / 2])
    })
}

/// Time mean of the linearly interpolated samples over `[a, b]`, metres; `None` when the samples
/// do not cover it.
fn mean_level_over(times_s: &[f64], heights_m: &[f64], a: f64, b: f64) -> Option<f64> {
    if times_s.len() < 2 || times_s[0] > a || times_s[times_s.len() - 1] < b || b <= a {
        return None;
    }
    let at = |t: f64| -> f64 {
        let k = times_s
            .partition_point(|&x| x <= t)
            .clamp(1, times_s.len() - 1);
        let (t0, t1) = (times_s[k - 1], times_s[k]);
        heights_m[k - 1] + (heights_m[k] - heights_m[k - 1]) * (t - t0) / (t1 - t0)
    };
    let mut sum = 0.0;
    let mut prev = (a, at(a));
    let first = times_s.partition_point(|&x| x <= a);
    for k in first..times_s.len() {
        if times_s[k] >= b {
            break;
        }
        let cur = (times_s[k], heights_m[k]);
        sum += 0.5 * (prev.1 + cur.1) * (cur.0 - prev.0);
        prev = cur;
    }
    sum += 0.5 * (prev.1 + at(b)) * (b - prev.0);
    Some(sum / (b - a))
}

/// The two gauges' values over the same tides, day by day.
#[derive(Debug, Clone, PartialEq)]
pub struct PairedDays {
    /// The subordinate's time difference from the control, seconds ([`time_difference_s`]).
    pub time_difference_s: f64,
    /// The subordinate's days: each the control's day moved by the time difference.
    pub subordinate: Vec<DayValues>,
    /// The control's days, paired one to one.
    pub control: Vec<DayValues>,
}

/// Pairs the two gauges' tidal days so that each pair holds the same tides: the control's
/// complete days ([`day_values`]) are kept as its tabulation placed them, and each is moved by
/// the subordinate's time difference to make the subordinate's day; a moved day counts when it
/// lies within the subordinate's complete days (inside one stretch of record, [`crate::compute::extrema`]).
/// Its values are the subordinate's high and low waters within it and the time mean of its
/// samples over it (`times_s`, `heights_m`: the series the tabulation was made from). Two
/// records tabulated apart may cut their days a half or quarter cycle apart (a semidiurnal tide
/// has four stretches between turning points of about equal width), so their own days would not
/// pair the same tides. `None` when the time difference cannot be found.
pub fn pair_days(
    subordinate: &Tabulation,
    times_s: &[f64],
    heights_m: &[f64],
    control: &Tabulation,
) -> Option<PairedDays> {
    let dt = time_difference_s(subordinate, control)?;
    let own: Vec<(f64, f64)> = subordinate
        .days
        .iter()
        .filter(|d| d.complete)
        .map(|d| (d.start_s, d.start_s + TIDAL_DAY_S))
        .collect();
    // Whether [a, b) lies within consecutive complete days of the subordinate.
    let covered = |a: f64, b: f64| -> bool {
        let mut reach = a;
        for &(s, e) in &own {
            if s <= reach + 1e-6 && e > reach {
                reach = e;
            }
            if reach >= b {
                return true;
            }
        }
        false
    };
    let (mut sub, mut ctl) = (Vec::new(), Vec::new());
    for c in day_values(control) {
        let (a, b) = (c.start_s + dt, c.start_s + dt + TIDAL_DAY_S);
        if !covered(a, b) {
            continue;
        }
        let (mut hw, mut lw) = (Vec::new(), Vec::new());
        for e in subordinate
            .extrema
            .iter()
            .filter(|e| e.water.t_s >= a && e.water.t_s < b)
        {
            if e.water.high {
                hw.push(e.water.height_m);
            } else {
                lw.push(e.water.height_m);
            }
        }
        let Some(msl_m) = mean_level_over(times_s, heights_m, a, b) else {
            continue;
        };
        if hw.is_empty() || lw.is_empty() {
            continue;
        }
        let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
        sub.push(DayValues {
            start_s: a,
            means: TidalMeans {
                mhw_m: mean(&hw),
                mlw_m: mean(&lw),
                mhhw_m: hw.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                mllw_m: lw.iter().copied().fold(f64::INFINITY, f64::min),
                msl_m,
            },
            high_waters: hw.len(),
            low_waters: lw.len(),
        });
        ctl.push(c);
    }
    Some(PairedDays {
        time_difference_s: dt,
        subordinate: sub,
        control: ctl,
    })
}

/// Mean range below which the range-ratio method is not the default, metres: a ratio of ranges
/// this small is dominated by the tabulation's noise and by non-tidal changes (weakly tidal
/// places take the direct method, DOMAIN §6).
pub const SMALL_RANGE_M: f64 = 0.3;

/// Share of the control's paired tidal days with a single high and a single low water above
/// which the tide is taken as diurnal.
pub const DIURNAL_DAY_SHARE: f64 = 0.5;

/// Why the default method was chosen.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
pub enum MethodReason {
    /// Two high and two low waters on most days, and ranges above [`SMALL_RANGE_M`]:
    /// semidiurnal or mixed, range-ratio method.
    Semidiurnal {
        /// Share of the control's paired days with one high and one low water.
        diurnal_share: f64,
    },
    /// More than [`DIURNAL_DAY_SHARE`] of the control's paired days have one high and one low
    /// water: diurnal, direct method.
    Diurnal {
        /// That share.
        diurnal_share: f64,
    },
    /// The smaller of the two period mean ranges is below [`SMALL_RANGE_M`]: direct method.
    SmallRange {
        /// The smaller mean range over the common period, metres.
        mn_m: f64,
    },
}

/// The default method for a comparison: the range-ratio method for a semidiurnal or mixed tide,
/// the direct method for a diurnal tide or small ranges (DOMAIN §6). `control_days` are the
/// control's paired days.
pub fn default_method(control_days: &[DayValues], cmp: &Comparison) -> (Method, MethodReason) {
    let n = control_days.len().max(1) as f64;
    let single = control_days
        .iter()
        .filter(|d| d.high_waters == 1 && d.low_waters == 1)
        .count() as f64;
    let diurnal_share = single / n;
    let mn_m = cmp.subordinate.mn_m().min(cmp.control.mn_m());
    if mn_m < SMALL_RANGE_M {
        (Method::DirectLevel, MethodReason::SmallRange { mn_m })
    } else if diurnal_share > DIURNAL_DAY_SHARE {
        (Method::DirectLevel, MethodReason::Diurnal { diurnal_share })
    } else {
        (
            Method::ModifiedRangeRatio,
            MethodReason::Semidiurnal { diurnal_share },
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::astro::{astro_at, constituent, equilibrium_argument_deg, nodal_fu};
    use crate::compute::harmonic::{predict_grid, HarmonicConstants};
    use crate::compute::lat::{lat_hat, MIN_YEARS};
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    /// Shift, range scale and lag of the subordinate against the control.
    const SHIFT_M: f64 = 0.37;
    const SCALE: f64 = 0.85;
    const LAG_S: f64 = 40.0 * 60.0;
    const DT_S: f64 = 60.0;
    const LAG_N: usize = 40;

    fn control_constants() -> HarmonicConstants {
        let c = |n: &str| constituent(n).unwrap();
        HarmonicConstants {
            z0_m: 2.4,
            constituents: vec![
                (c("M2"), 1.0, 40.0),
                (c("S2"), 0.35, 70.0),
                (c("N2"), 0.2, 20.0),
                (c("K1"), 0.3, 120.0),
                (c("O1"), 0.2, 100.0),
            ],
        }
    }

    /// A tidal day: two periods of M2 (common practice), seconds.
    fn tidal_day_s() -> f64 {
        2.0 * 360.0 / constituent("M2").unwrap().speed_deg_per_h * 3600.0
    }

    /// The first instant after `t_s` at which M2's phase V + u − G is 90° (mid-tide), so that
    /// the tidal days start half-way between M2's high and low waters.
    fn mid_tide_after(k: &HarmonicConstants, t_s: f64) -> f64 {
        let (m2, _, g) = k.constituents[0];
        let a = astro_at(t_s);
        let phase = equilibrium_argument_deg(m2, &a) + nodal_fu(m2, &a).1 - g;
        t_s + (90.0 - phase).rem_euclid(360.0) / m2.speed_deg_per_h * 3600.0
    }

    /// High and low waters (time, height, high) of a sampled record: local extremes of the
    /// samples, refined by the parabola through the three samples (test-only picker).
    fn pick(t0_s: f64, h: &[f64]) -> Vec<(f64, f64, bool)> {
        let mut out = Vec::new();
        for i in 1..h.len() - 1 {
            let (a, b, c) = (h[i - 1], h[i], h[i + 1]);
            let high = b > a && b >= c;
            let low = b < a && b <= c;
            if !(high || low) {
                continue;
            }
            let den = a - 2.0 * b + c;
            let d = 0.5 * (a - c) / den;
            out.push((
                t0_s + (i as f64 + d) * DT_S,
                b - 0.125 * (a - c) * (a - c) / den,
                high,
            ));
        }
        out
    }

    /// Tidal-day values of a record sampled every minute from `t0_s`, for `days` tidal days from
    /// `start_s` (each day's mean of its high waters, of its low waters, its higher high and
    /// lower low water, the mean of its samples).
    fn tidal_days(t0_s: f64, h: &[f64], start_s: f64, days: usize) -> Vec<TidalMeans> {
        let d = tidal_day_s();
        let ex = pick(t0_s, h);
        (0..days)
            .map(|k| {
                let (a, b) = (start_s + k as f64 * d, start_s + (k + 1) as f64 * d);
                let inside = |t: f64| t >= a && t < b;
                let hw: Vec<f64> = ex
                    .iter()
                    .filter(|e| e.2 && inside(e.0))
                    .map(|e| e.1)
                    .collect();
                let lw: Vec<f64> = ex
                    .iter()
                    .filter(|e| !e.2 && inside(e.0))
                    .map(|e| e.1)
                    .collect();
                assert!(!hw.is_empty() && !lw.is_empty(), "tidal day {k}");
                let samples: Vec<f64> = h
                    .iter()
                    .enumerate()
                    .filter(|(i, _)| inside(t0_s + *i as f64 * DT_S))
                    .map(|(_, v)| *v)
                    .collect();
                TidalMeans {
                    mhw_m: hw.iter().sum::<f64>() / hw.len() as f64,
                    mlw_m: lw.iter().sum::<f64>() / lw.len() as f64,
                    mhhw_m: hw.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                    mllw_m: lw.iter().copied().fold(f64::INFINITY, f64::min),
                    msl_m: samples.iter().sum::<f64>() / samples.len() as f64,
                }
            })
            .collect()
    }

    fn mean_days(v: &[TidalMeans]) -> TidalMeans {
        let n = v.len() as f64;
        TidalMeans {
            mhw_m: v.iter().map(|x| x.mhw_m).sum::<f64>() / n,
            mlw_m: v.iter().map(|x| x.mlw_m).sum::<f64>() / n,
            mhhw_m: v.iter().map(|x| x.mhhw_m).sum::<f64>() / n,
            mllw_m: v.iter().map(|x| x.mllw_m).sum::<f64>() / n,
            msl_m: v.iter().map(|x| x.msl_m).sum::<f64>() / n,
        }
    }

    /// A synthetic common period: the control's record, and the subordinate's, the control
    /// lagged by 40 minutes, its range scaled by `scale` about Z0 and raised by 0.37 m, as
    /// tidal days; plus the control's long-term datums (its means over 353 tidal days, a year)
    /// with LAT (18.61 years) as chart datum, and what the subordinate's datums truly are.
    struct Case {
        sub: Vec<TidalMeans>,
        ctl: Vec<TidalMeans>,
        control: ControlDatums,
        truth: TidalMeans,
        true_cd_m: f64,
        sum_h_m: f64,
    }

    fn affine(z0: f64, scale: f64, v: f64) -> f64 {
        SHIFT_M + z0 + scale * (v - z0)
    }

    fn case(days: usize, scale: f64) -> Case {
        let k = control_constants();
        let z0 = k.z0_m;
        // 2026-03-01, moved to M2's mid-tide.
        let start = mid_tide_after(&k, 1_772_323_200.0);
        let d = tidal_day_s();
        // The control from 40 minutes before the first tidal day to an hour after the last.
        let t0 = start - LAG_S - 3600.0;
        let n = ((days as f64 * d + LAG_S + 7200.0) / DT_S) as usize;
        let c = predict_grid(&k, t0, DT_S, n);
        // The subordinate at t is the control at t − 40 min.
        let s: Vec<f64> = c[..n - LAG_N]
            .iter()
            .map(|&v| affine(z0, scale, v))
            .collect();
        let s_t0 = t0 + LAG_S;
        // Precondition of the exact relations below: every high and low water of the
        // subordinate is the control's 40 minutes later, in the same tidal day (no tidal-day
        // boundary within 40 minutes after a control extreme: the days start at M2's mid-tide,
        // 3.1 h from its extremes).
        let in_days = |e: &(f64, f64, bool)| e.0 >= start && e.0 < start + days as f64 * d;
        let ec: Vec<_> = pick(t0, &c).into_iter().filter(in_days).collect();
        let es: Vec<_> = pick(s_t0, &s).into_iter().filter(in_days).collect();
        assert_eq!(ec.len(), es.len());
        for (a, b) in ec.iter().zip(&es) {
            assert!((b.0 - a.0 - LAG_S).abs() < 1.0 && a.2 == b.2);
            assert_eq!(((a.0 - start) / d).floor(), ((b.0 - start) / d).floor());
        }
        let ctl = tidal_days(t0, &c, start, days);
        let sub = tidal_days(s_t0, &s, start, days);
        // Long term: 353 tidal days (a year) from 2026-01-01 at mid-tide.
        let ly = mid_tide_after(&k, 1_767_225_600.0);
        let ny = (353.0 * d / DT_S) as usize + 10;
        let year = predict_grid(&k, ly, DT_S, ny);
        let long = mean_days(&tidal_days(ly, &year, ly, 353));
        let lat = lat_hat(&k, 1_767_225_600.0, MIN_YEARS, 360.0)
            .unwrap()
            .lat_m;
        let u5 = TidalMeans {
            mhw_m: 0.005,
            mlw_m: 0.005,
            mhhw_m: 0.005,
            mllw_m: 0.005,
            msl_m: 0.005,
        };
        Case {
            sub,
            ctl,
            control: ControlDatums {
                datums: long,
                u: u5,
                chart_datum_m: lat,
                u_chart_datum_m: 0.01,
            },
            truth: TidalMeans {
                mhw_m: affine(z0, scale, long.mhw_m),
                mlw_m: affine(z0, scale, long.mlw_m),
                mhhw_m: affine(z0, scale, long.mhhw_m),
                mllw_m: affine(z0, scale, long.mllw_m),
                msl_m: affine(z0, scale, long.msl_m),
            },
            true_cd_m: affine(z0, scale, lat),
            sum_h_m: k.constituents.iter().map(|c| c.1).sum(),
        }
    }

    /// Bound on the shift of a period's mean level when its tidal-day windows move by the lag:
    /// the means telescope to the level over the lag at both ends of T, at most 2·lag·ΣH/T
    /// (times the scale), plus 1e-9 m.
    fn msl_window_bound(c: &Case, days: usize, scale: f64) -> f64 {
        scale * 2.0 * LAG_S * c.sum_h_m / (days as f64 * tidal_day_s()) + 1e-9
    }

    /// Shifted and lagged only (range ×1): both methods recover the subordinate's datums
    /// exactly (its primes differ from the control's by the shift alone, NOAA CO-OPS 2003
    /// formulas), MSL to within the window bound, chart datum (the control's LAT) to 1e-9 m;
    /// and the two methods agree.
    #[test]
    fn equal_ranges_both_methods_recover_the_shift_and_agree() {
        let days = 29;
        let c = case(days, 1.0);
        let cmp = compare_tidal_days(&c.sub, &c.ctl).unwrap();
        let mrr = transfer(&cmp, &c.control, Method::ModifiedRangeRatio).unwrap();
        let dir = transfer(&cmp, &c.control, Method::DirectLevel).unwrap();
        for r in [&mrr, &dir] {
            let t = &c.truth;
            for (got, want) in [
                (r.mhw, t.mhw_m),
                (r.mlw, t.mlw_m),
                (r.mhhw, t.mhhw_m),
                (r.mllw, t.mllw_m),
                (r.mtl, t.mtl_m()),
                (r.dtl, t.dtl_m()),
                (r.mn, t.mn_m()),
                (r.gt, t.gt_m()),
                (r.chart_datum, c.true_cd_m),
            ] {
                assert!(
                    (got.value_m - want).abs() < 1e-9,
                    "{:?}: {} vs {want}",
                    r.method,
                    got.value_m
                );
            }
            assert!((r.msl.value_m - t.msl_m).abs() <= msl_window_bound(&c, days, 1.0));
            assert_eq!(r.zero_above_chart_datum.value_m, -r.chart_datum.value_m);
        }
        for (a, b) in [
            (mrr.mhw, dir.mhw),
            (mrr.mlw, dir.mlw),
            (mrr.mhhw, dir.mhhw),
            (mrr.mllw, dir.mllw),
            (mrr.chart_datum, dir.chart_datum),
        ] {
            assert!((a.value_m - b.value_m).abs() < 1e-9);
        }
        // An exact copy: the day-by-day differences do not scatter, only the control's own u
        // remains: MTL = (MHW + MLW)/2 of independent 5 mm → 3.5 mm.
        assert!(
            (mrr.mtl.u_m - 0.005 / 2f64.sqrt()).abs() < 1e-9,
            "{}",
            mrr.mtl.u_m
        );
    }

    /// Shifted, range ×0.85 and lagged: the range-ratio method recovers the ranges exactly and
    /// every level with the derived error (1 − 0.85)·(X_c − X'_c), X = MTL for MHW/MLW/MTL,
    /// X = DTL for MHHW/MLLW/DTL and the chart datum, X = MSL for MSL (plus the window bound):
    /// MTL_s = MTL'_s + MTL_c − MTL'_c with MTL'_s = 0.37 + Z0 + 0.85(MTL'_c − Z0). The direct
    /// method errs by (1 − 0.85)·(D_c − D'_c) for each datum D, and differs from the range-ratio
    /// method at MHW by ½(MN'_s − MN'_c)(MN'_c − MN_c)/MN'_c (−that at MLW; GT likewise for
    /// MHHW/MLLW), algebra of the two sets of formulas.
    #[test]
    fn scaled_range_recovered_by_the_range_ratio_method() {
        let days = 29;
        let c = case(days, SCALE);
        let cmp = compare_tidal_days(&c.sub, &c.ctl).unwrap();
        let mrr = transfer(&cmp, &c.control, Method::ModifiedRangeRatio).unwrap();
        let dir = transfer(&cmp, &c.control, Method::DirectLevel).unwrap();
        let (l, p, t) = (&c.control.datums, &cmp.control, &c.truth);
        let k = 1.0 - SCALE;
        let e_mtl = k * (l.mtl_m() - p.mtl_m());
        let e_dtl = k * (l.dtl_m() - p.dtl_m());
        for (got, want, e) in [
            (mrr.mn, t.mn_m(), 0.0),
            (mrr.gt, t.gt_m(), 0.0),
            (mrr.mhw, t.mhw_m, e_mtl),
            (mrr.mlw, t.mlw_m, e_mtl),
            (mrr.mtl, t.mtl_m(), e_mtl),
            (mrr.mhhw, t.mhhw_m, e_dtl),
            (mrr.mllw, t.mllw_m, e_dtl),
            (mrr.dtl, t.dtl_m(), e_dtl),
            (mrr.chart_datum, c.true_cd_m, e_dtl),
        ] {
            assert!(
                (got.value_m - want - e).abs() < 1e-9,
                "{} vs {want} + {e}",
                got.value_m
            );
        }
        assert!(
            (mrr.msl.value_m - t.msl_m - k * (l.msl_m - p.msl_m)).abs()
                <= msl_window_bound(&c, days, SCALE)
        );
        // The derived errors are small for an astronomical tide: MTL and DTL of a month are
        // within a few centimetres of the year's, so 0.15 of that stays below 1 cm.
        assert!(e_mtl.abs() < 0.01 && e_dtl.abs() < 0.01, "{e_mtl} {e_dtl}");
        // Direct: (1 − 0.85)(D_c − D'_c) for each datum.
        for (got, want, lc, pc) in [
            (dir.mhw, t.mhw_m, l.mhw_m, p.mhw_m),
            (dir.mlw, t.mlw_m, l.mlw_m, p.mlw_m),
            (dir.mhhw, t.mhhw_m, l.mhhw_m, p.mhhw_m),
            (dir.mllw, t.mllw_m, l.mllw_m, p.mllw_m),
            (dir.mn, t.mn_m(), l.mn_m(), p.mn_m()),
        ] {
            assert!((got.value_m - want - k * (lc - pc)).abs() < 1e-9);
        }
        let s = &cmp.subordinate;
        let dmn = 0.5 * (s.mn_m() - p.mn_m()) * (p.mn_m() - l.mn_m()) / p.mn_m();
        let dgt = 0.5 * (s.gt_m() - p.gt_m()) * (p.gt_m() - l.gt_m()) / p.gt_m();
        assert!((dir.mhw.value_m - mrr.mhw.value_m - dmn).abs() < 1e-9);
        assert!((dir.mlw.value_m - mrr.mlw.value_m + dmn).abs() < 1e-9);
        assert!((dir.mhhw.value_m - mrr.mhhw.value_m - dgt).abs() < 1e-9);
        assert!((dir.mllw.value_m - mrr.mllw.value_m + dgt).abs() < 1e-9);
        // The range ratio of an exact copy: 0.85 to rounding.
        assert!((s.mn_m() / p.mn_m() - SCALE).abs() < 1e-9);
        // The subordinate's zero above chart datum: −CD_s, same uncertainty.
        assert_eq!(mrr.zero_above_chart_datum.value_m, -mrr.chart_datum.value_m);
        assert_eq!(mrr.zero_above_chart_datum.u_m, mrr.chart_datum.u_m);
    }

    /// The subordinate's tidal-day values with a weather residual the control does not share
    /// (AR(1) day to day, ρ = 0.5, σ = 5 cm, added to every level of the day).
    fn with_residual(sub: &[TidalMeans], rng: &mut rand_chacha::ChaCha8Rng) -> Vec<TidalMeans> {
        let w = Normal::new(0.0, 0.05 * (1.0 - 0.25f64).sqrt()).unwrap();
        let mut r = Normal::new(0.0, 0.05).unwrap().sample(rng);
        sub.iter()
            .map(|d| {
                let v = TidalMeans {
                    mhw_m: d.mhw_m + r,
                    mlw_m: d.mlw_m + r,
                    mhhw_m: d.mhhw_m + r,
                    mllw_m: d.mllw_m + r,
                    msl_m: d.msl_m + r,
                };
                r = 0.5 * r + w.sample(rng);
                v
            })
            .collect()
    }

    /// The uncertainty model against Monte Carlo: 400 realisations of a residual the control
    /// does not share (AR(1), ρ = 0.5, σ = 5 cm); the scatter of the transferred MTL about its
    /// noiseless value agrees with the mean reported u of the difference's part (control u set
    /// to 0) within 30 % (400 draws scatter the standard deviation by 3.5 %; ρ estimated from
    /// 29 days is biased low by about (1 + 4ρ)/n ≈ 0.1, Bretherton et al. 1999, from memory).
    /// AR(1) theory gives σ·√((1 + ρ)/((1 − ρ)·n)) = 1.6 cm for 29 days. Four times the common
    /// period halves the reported u (1/√T) within 20 %.
    #[test]
    fn uncertainty_matches_the_scatter_and_shrinks_with_the_period() {
        let days = 29;
        let c = case(116, SCALE);
        let mut control = c.control;
        control.u = TidalMeans {
            mhw_m: 0.0,
            mlw_m: 0.0,
            mhhw_m: 0.0,
            mllw_m: 0.0,
            msl_m: 0.0,
        };
        control.u_chart_datum_m = 0.0;
        let base = {
            let cmp = compare_tidal_days(&c.sub[..days], &c.ctl[..days]).unwrap();
            transfer(&cmp, &control, Method::ModifiedRangeRatio)
                .unwrap()
                .mtl
                .value_m
        };
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(8);
        let (mut errs, mut us, mut us_long) = (Vec::new(), Vec::new(), Vec::new());
        for _ in 0..400 {
            let sub = with_residual(&c.sub, &mut rng);
            let cmp = compare_tidal_days(&sub[..days], &c.ctl[..days]).unwrap();
            let r = transfer(&cmp, &control, Method::ModifiedRangeRatio).unwrap();
            errs.push(r.mtl.value_m - base);
            us.push(r.mtl.u_m);
            let cmp4 = compare_tidal_days(&sub, &c.ctl).unwrap();
            us_long.push(
                transfer(&cmp4, &control, Method::ModifiedRangeRatio)
                    .unwrap()
                    .mtl
                    .u_m,
            );
        }
        let n = errs.len() as f64;
        let m = errs.iter().sum::<f64>() / n;
        let sd = (errs.iter().map(|e| (e - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        let u = us.iter().sum::<f64>() / n;
        let u4 = us_long.iter().sum::<f64>() / n;
        let theory = 0.05 * (3.0 / days as f64).sqrt();
        assert!(
            (sd / theory - 1.0).abs() < 0.15,
            "scatter {sd} vs AR(1) theory {theory}"
        );
        assert!((u / sd - 1.0).abs() < 0.3, "reported {u} vs scatter {sd}");
        assert!((u4 / u - 0.5).abs() < 0.1, "116 days {u4} vs 29 days {u}");
    }

    #[test]
    fn what_cannot_be_compared_is_refused() {
        let d = TidalMeans {
            mhw_m: 3.0,
            mlw_m: 1.0,
            mhhw_m: 3.2,
            mllw_m: 0.8,
            msl_m: 2.0,
        };
        assert_eq!(
            compare_tidal_days(&[d; 4], &[d; 3]),
            Err(TransferError::DayCountMismatch {
                subordinate: 4,
                control: 3
            })
        );
        assert_eq!(
            compare_tidal_days(&[d; 2], &[d; 2]),
            Err(TransferError::TooFewDays { days: 2, min: 3 })
        );
        let mut bad = [d; 3];
        bad[1].mlw_m = f64::NAN;
        assert_eq!(
            compare_tidal_days(&[d; 3], &bad),
            Err(TransferError::NotFinite {
                day: 1,
                gauge: "control"
            })
        );
        let flat = TidalMeans {
            mhw_m: 1.0,
            mlw_m: 1.0,
            ..d
        };
        assert!(matches!(
            compare_tidal_days(&[d; 3], &[flat; 3]),
            Err(TransferError::NoRange { .. })
        ));
        let cmp = compare_tidal_days(&[d; 3], &[d; 3]).unwrap();
        let mut control = ControlDatums {
            datums: d,
            u: d,
            chart_datum_m: 0.5,
            u_chart_datum_m: -0.1,
        };
        assert_eq!(
            transfer(&cmp, &control, Method::DirectLevel),
            Err(TransferError::BadControl)
        );
        control.u_chart_datum_m = 0.1;
        control.datums = flat;
        assert!(matches!(
            transfer(&cmp, &control, Method::ModifiedRangeRatio),
            Err(TransferError::NoRange { .. })
        ));
    }

    /// A record from `t0` at 6-minute steps of the tide of `constants` `lag_s` later,
    /// tabulated.
    fn tabulated(
        k: &HarmonicConstants,
        t0: f64,
        lag_s: f64,
        n: usize,
    ) -> (Vec<f64>, Vec<f64>, Tabulation) {
        use crate::compute::extrema::{tabulate, ExtremaSettings};
        let h = predict_grid(k, t0 - lag_s, 360.0, n);
        let t: Vec<f64> = (0..n).map(|i| t0 + 360.0 * i as f64).collect();
        let tab = tabulate(&t, &h, &ExtremaSettings::default()).unwrap();
        (t, h, tab)
    }

    /// A subordinate that is the control 40 minutes later: the time difference is 40 min
    /// (within 30 s: the parabola vertices of two samplings 2 minutes apart in phase); every
    /// pair holds the same tides (the subordinate's day values equal the control's, its days
    /// start 40 min later), and the mean level of a line over a window is its midpoint value
    /// (trapezoid rule, exact for a line: h = 1 + t/10 over [5, 25] has mean 2.5).
    #[test]
    fn days_pair_the_same_tides() {
        let k = control_constants();
        let t0 = 1_772_323_200.0;
        let n = 20 * 240;
        let (_, _, tc) = tabulated(&k, t0, 0.0, n);
        let (ts, hs, tsub) = tabulated(&k, t0, LAG_S, n);
        let dt = time_difference_s(&tsub, &tc).unwrap();
        assert!((dt - LAG_S).abs() < 30.0, "{dt}");
        let p = pair_days(&tsub, &ts, &hs, &tc).unwrap();
        assert!(p.control.len() >= 17, "{}", p.control.len());
        for (s, c) in p.subordinate.iter().zip(&p.control) {
            assert_eq!(s.start_s, c.start_s + dt);
            assert_eq!((s.high_waters, s.low_waters), (c.high_waters, c.low_waters));
            assert!((s.means.mhhw_m - c.means.mhhw_m).abs() < 2e-3);
            assert!((s.means.mllw_m - c.means.mllw_m).abs() < 2e-3);
            // The day's mean level: the same tide over a window 40 min later, to within the
            // 40-minute shift's share (≤ 2·lag·ΣH/T, the window bound above) plus the
            // subordinate's window being moved by dt rather than exactly 40 min.
            assert!((s.means.msl_m - c.means.msl_m).abs() < 0.15);
        }
        let line_t = [0.0, 10.0, 20.0, 30.0];
        let line_h = [1.0, 2.0, 3.0, 4.0];
        assert!((mean_level_over(&line_t, &line_h, 5.0, 25.0).unwrap() - 2.5).abs() < 1e-12);
        assert_eq!(mean_level_over(&line_t, &line_h, -1.0, 25.0), None);
    }

    /// The default method: range ratio for the mixed tide of the other tests (form factor 0.37,
    /// two high waters a day), direct for a diurnal tide (K1 and O1 alone: one high and one low
    /// water a day) and for small ranges (the same tide scaled to a tenth: MN below 0.3 m).
    #[test]
    fn default_method_by_tide_type() {
        let t0 = 1_772_323_200.0;
        let n = 20 * 240;
        let run = |k: &HarmonicConstants| {
            let (ts, hs, tsub) = tabulated(k, t0, LAG_S, n);
            let (_, _, tc) = tabulated(k, t0, 0.0, n);
            let p = pair_days(&tsub, &ts, &hs, &tc).unwrap();
            let sv: Vec<TidalMeans> = p.subordinate.iter().map(|d| d.means).collect();
            let cv: Vec<TidalMeans> = p.control.iter().map(|d| d.means).collect();
            let cmp = compare_tidal_days(&sv, &cv).unwrap();
            default_method(&p.control, &cmp)
        };
        let mixed = control_constants();
        assert!(matches!(
            run(&mixed),
            (Method::ModifiedRangeRatio, MethodReason::Semidiurnal { .. })
        ));
        let c = |n: &str| constituent(n).unwrap();
        let diurnal = HarmonicConstants {
            z0_m: 1.0,
            constituents: vec![(c("K1"), 0.5, 120.0), (c("O1"), 0.4, 100.0)],
        };
        assert!(matches!(
            run(&diurnal),
            (Method::DirectLevel, MethodReason::Diurnal { .. })
        ));
        let small = HarmonicConstants {
            z0_m: 1.0,
            constituents: mixed
                .constituents
                .iter()
                .map(|&(c, h, g)| (c, 0.1 * h, g))
                .collect(),
        };
        assert!(matches!(
            run(&small),
            (Method::DirectLevel, MethodReason::SmallRange { .. })
        ));
    }
}
