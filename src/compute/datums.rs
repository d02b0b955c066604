//! Tidal datums of an observed record, from its tabulated high and low waters
//! ([`crate::compute::extrema`]), each with a standard uncertainty.
//!
//! # Definitions (DOMAIN §6, common practice)
//! Over the record's **complete** tidal days only (days a gap or the record's ends cut are left
//! out whole, so that no day counts with a high or low water missing):
//! * MSL: the mean of the days' mean levels (each the time mean of the interpolated record over
//!   the day, so a record of any sampling step counts each day once);
//! * MHW, MLW: the mean of every high (low) water of those days;
//! * MHHW, MLLW: the mean of each day's highest high (lowest low) water — a day with a single
//!   high water counts it as its higher high water, and a single low water as its lower low;
//! * MTL = (MHW + MLW)/2, DTL = (MHHW + MLLW)/2, MN = MHW − MLW, GT = MHHW − MLLW.
//!
//! # Uncertainty model
//! What a datum from a short record misses is mainly the slow modulation of the tide that the
//! record samples only in part: over a spring–neap cycle (14.77 days) the high waters rise and
//! fall by about the S2 amplitude, and with them MHW, MLW, MN and GT. Each datum has a **day
//! series** `x_j` over the complete days (MSL: the day's mean level; MHW: the mean of the day's
//! high waters; MHHW: its highest; MTL: the mean of the day's mean high and mean low water; MN
//! their difference; and so on), whose mean is (or is close to) the datum. Its scatter `s²` is
//! split with the series's lag-one (one tidal day) autocorrelation `r1` into
//! * a slow part, modelled as a sinusoid of the spring–neap period `P`: its share of `s²` is
//!   `r1 / cos(2π·T/P)` (T the tidal day; clamped to [0, 1]), since such a sinusoid has
//!   autocorrelation `cos(2π·T/P)` at one day and white scatter none;
//! * a white part (noise, weather, tabulation), the rest.
//!
//! The mean of a sinusoid of variance `V` over a window of length `L` at a random phase differs
//! from its long-run mean by `√V · |sinc(πL/P)|` in RMS (analytic); averaged over window lengths
//! this is `√V · P/(√2·π·L)` for `L` beyond a period, and `√V` for a window much shorter. The
//! model takes `g(L) = 1/√(1 + 2(πL/P)²)`, which has both limits, so
//!
//! ```text
//! u² = V_slow · g(L)² + V_white / n
//! ```
//!
//! with `n` the days in the series and `L` the span of the complete days. This is the error
//! relative to the mean over a long record of the **same** tide (a year about the record, in the
//! tests). **Not covered**, and to be added by whoever adopts the datum: the 18.61-year nodal
//! modulation (M2's amplitude varies by ±3.7 %, K1's by ±11 %, O1's by ±19 %, so a month's MN
//! differs from the epoch's by up to ±3.7 % of it); seasonal changes of mean level (SA, SSA,
//! river flow); modulations slower than the spring–neap cycle (the 27.55-day perigee cycle
//! carried by N2); and any error of the gauge zero. Records shorter than the spring–neap period
//! sample a fraction of a cycle, and their scatter under-states its amplitude: the stated `u` is
//! then a lower bound. A datum referred to an epoch is transferred from a control gauge (DOMAIN §6)
//! rather than taken from a short record as it is.
//!
//! # References
//! Datum definitions: NOAA CO-OPS, *Computational Techniques for Tidal Datums Handbook*, NOAA
//! Special Publication NOS CO-OPS 2 (2003), from memory. The mean of a sinusoid over a window
//! and the autocorrelation of a sinusoid: analytic. Nodal factor ranges: Pugh (1987), from
//! memory.

use crate::compute::extrema::{Tabulation, TIDAL_DAY_S};

/// The spring–neap period, days: 360° / (30 − 28.9841042) °/h.
pub const SPRING_NEAP_DAYS: f64 = 360.0 / (30.0 - 28.984_104_2) / 24.0;

/// A datum, metres, with its standard uncertainty.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Datum {
    /// The value, metres (a level in the record's reference, or a range).
    pub value_m: f64,
    /// Its standard uncertainty, metres ([module doc](self)).
    pub u_m: f64,
    /// Complete tidal days its day series holds.
    pub days: usize,
}

/// The datums of a record.
#[derive(Debug, Clone, PartialEq)]
pub struct Datums {
    /// Mean sea level.
    pub msl: Datum,
    /// Mean high water.
    pub mhw: Datum,
    /// Mean low water.
    pub mlw: Datum,
    /// Mean higher high water.
    pub mhhw: Datum,
    /// Mean lower low water.
    pub mllw: Datum,
    /// Mean tide level (MHW + MLW)/2.
    pub mtl: Datum,
    /// Diurnal tide level (MHHW + MLLW)/2.
    pub dtl: Datum,
    /// Mean range MHW − MLW.
    pub mn: Datum,
    /// Great diurnal range MHHW − MLLW.
    pub gt: Datum,
    /// Complete tidal days used.
    pub complete_days: usize,
    /// Tidal days the record touches but does not cover whole (left out).
    pub incomplete_days: usize,
    /// High and low waters in the complete days.
    pub high_waters: usize,
    /// Low waters in the complete days.
    pub low_waters: usize,
    /// High or low waters of the complete days that absorbed a double.
    pub doubles: usize,
    /// First complete day's start and last complete day's end, UTC seconds.
    pub span_s: (f64, f64),
}

/// Why datums cannot be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum DatumsError {
    /// Fewer than two complete tidal days, or a day without a high or a low water.
    #[error("the record covers {days} complete tidal days (24.84 h) with high and low waters; datums need at least 2")]
    TooFewDays {
        /// Complete days with both a high and a low water.
        days: usize,
    },
}

/// One complete day's values.
struct Day {
    index: usize,
    hw: Vec<f64>,
    lw: Vec<f64>,
}

/// The datums of a tabulated record ([module doc](self)).
pub fn datums(tab: &Tabulation) -> Result<Datums, DatumsError> {
    let mut days: Vec<Day> = tab
        .days
        .iter()
        .enumerate()
        .filter_map(|(i, d)| {
            d.mean_level_m.map(|_| Day {
                index: i,
                hw: Vec::new(),
                lw: Vec::new(),
            })
        })
        .collect();
    let mut doubles = 0;
    for e in &tab.extrema {
        if let Some(d) = days.iter_mut().find(|d| d.index == e.day) {
            if e.water.high {
                d.hw.push(e.water.height_m);
            } else {
                d.lw.push(e.water.height_m);
            }
            doubles += usize::from(e.double.is_some());
        }
    }
    let complete_days = days.len();
    days.retain(|d| !d.hw.is_empty() && !d.lw.is_empty());
    if days.len() < 2 {
        return Err(DatumsError::TooFewDays { days: days.len() });
    }
    let first = days[0].index;
    let last = days[days.len() - 1].index;
    let span_s = (
        tab.days[first].start_s,
        tab.days[last].start_s + TIDAL_DAY_S,
    );
    let length_days = (span_s.1 - span_s.0) / 86_400.0;
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let max = |v: &[f64]| v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let min = |v: &[f64]| v.iter().copied().fold(f64::INFINITY, f64::min);
    let series = |f: &dyn Fn(&Day) -> f64| -> Vec<(usize, f64)> {
        days.iter().map(|d| (d.index, f(d))).collect()
    };
    let datum = |value_m: f64, s: &[(usize, f64)]| Datum {
        value_m,
        u_m: u_of_day_mean(s, length_days),
        days: s.len(),
    };
    let all_hw: Vec<f64> = days.iter().flat_map(|d| d.hw.iter().copied()).collect();
    let all_lw: Vec<f64> = days.iter().flat_map(|d| d.lw.iter().copied()).collect();
    let mhw = mean(&all_hw);
    let mlw = mean(&all_lw);
    let mhhw = mean(&days.iter().map(|d| max(&d.hw)).collect::<Vec<_>>());
    let mllw = mean(&days.iter().map(|d| min(&d.lw)).collect::<Vec<_>>());
    let msl_days: Vec<(usize, f64)> = tab
        .days
        .iter()
        .enumerate()
        .filter_map(|(i, d)| d.mean_level_m.map(|m| (i, m)))
        .collect();
    let msl = msl_days.iter().map(|x| x.1).sum::<f64>() / msl_days.len() as f64;
    Ok(Datums {
        msl: datum(msl, &msl_days),
        mhw: datum(mhw, &series(&|d| mean(&d.hw))),
        mlw: datum(mlw, &series(&|d| mean(&d.lw))),
        mhhw: datum(mhhw, &series(&|d| max(&d.hw))),
        mllw: datum(mllw, &series(&|d| min(&d.lw))),
        mtl: datum(
            (mhw + mlw) / 2.0,
            &series(&|d| (mean(&d.hw) + mean(&d.lw)) / 2.0),
        ),
        dtl: datum(
            (mhhw + mllw) / 2.0,
            &series(&|d| (max(&d.hw) + min(&d.lw)) / 2.0),
        ),
        mn: datum(mhw - mlw, &series(&|d| mean(&d.hw) - mean(&d.lw))),
        gt: datum(mhhw - mllw, &series(&|d| max(&d.hw) - min(&d.lw))),
        complete_days,
        incomplete_days: tab.days.len() - complete_days,
        high_waters: all_hw.len(),
        low_waters: all_lw.len(),
        doubles,
        span_s,
    })
}

/// The share of a day series's variance taken as the slow (spring–neap) part, from its lag-one
/// autocorrelation `r1` ([module doc](self)).
pub fn slow_share(r1: f64) -> f64 {
    let rho_slow = (std::f64::consts::TAU * TIDAL_DAY_S / 86_400.0 / SPRING_NEAP_DAYS).cos();
    (r1 / rho_slow).clamp(0.0, 1.0)
}

/// The factor `g(L) = 1/√(1 + 2(πL/P)²)` by which the slow part's standard deviation reaches
/// the mean over `length_days` ([module doc](self)).
pub fn window_factor(length_days: f64) -> f64 {
    let x = std::f64::consts::PI * length_days / SPRING_NEAP_DAYS;
    1.0 / (1.0 + 2.0 * x * x).sqrt()
}

/// The standard uncertainty of the mean of a day series `(day index, value)` spanning
/// `length_days` ([module doc](self)).
///
/// # Units
/// Values in metres, the result in metres; `length_days` in days.
pub fn u_of_day_mean(s: &[(usize, f64)], length_days: f64) -> f64 {
    let n = s.len();
    if n < 2 {
        return 0.0;
    }
    let m = s.iter().map(|x| x.1).sum::<f64>() / n as f64;
    let var = s.iter().map(|x| (x.1 - m).powi(2)).sum::<f64>() / (n - 1) as f64;
    if var == 0.0 {
        return 0.0;
    }
    // Lag one over consecutive days only (a gap breaks the pairs).
    let (mut c1, mut pairs) = (0.0, 0usize);
    for w in s.windows(2) {
        if w[1].0 == w[0].0 + 1 {
            c1 += (w[0].1 - m) * (w[1].1 - m);
            pairs += 1;
        }
    }
    let var_pop = var * (n - 1) as f64 / n as f64;
    let r1 = if pairs > 0 {
        c1 / pairs as f64 / var_pop
    } else {
        0.0
    };
    let share = slow_share(r1);
    let g = window_factor(length_days);
    (share * var * g * g + (1.0 - share) * var / n as f64).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::extrema::{tabulate, ExtremaSettings};

    /// Pure M2 of amplitude H about Z0: MHW − MLW = 2H, MSL = MTL = DTL = Z0, MHHW = MHW
    /// (analytic: every crest is Z0 + H, every trough Z0 − H, the mean over a lunar day is Z0).
    #[test]
    fn pure_m2_datums_are_analytic() {
        let w = 28.984_104_2_f64.to_radians() / 3600.0;
        let (z0, h) = (2.1, 0.9);
        let t: Vec<f64> = (0..12 * 240).map(|i| 1.78e9 + 360.0 * i as f64).collect();
        let y: Vec<f64> = t.iter().map(|&x| z0 + h * (w * x + 0.3).cos()).collect();
        let tab = tabulate(&t, &y, &ExtremaSettings::default()).unwrap();
        let d = datums(&tab).unwrap();
        assert!((d.mn.value_m - 2.0 * h).abs() < 2e-4, "{:?}", d.mn);
        assert!((d.gt.value_m - 2.0 * h).abs() < 2e-4, "{:?}", d.gt);
        for (name, x) in [("MSL", d.msl), ("MTL", d.mtl), ("DTL", d.dtl)] {
            assert!((x.value_m - z0).abs() < 1e-4, "{name} {x:?}");
        }
        assert!((d.mhhw.value_m - d.mhw.value_m).abs() < 2e-4);
        // The day series are constant: nothing to be uncertain of (to the discretisation).
        assert!(
            d.mn.u_m < 1e-4 && d.msl.u_m < 1e-4,
            "{:?} {:?}",
            d.mn,
            d.msl
        );
        assert!(d.complete_days >= 10 && d.incomplete_days >= 1);
    }

    /// The model's two limits: a day series that is a spring–neap sinusoid is all slow
    /// (r1 = cos(2πT/P), share 1), white scatter is all white (share 0); g → 1 for a short
    /// window and → P/(√2πL) for a long one (analytic).
    #[test]
    fn model_limits() {
        let rho = (std::f64::consts::TAU * TIDAL_DAY_S / 86_400.0 / SPRING_NEAP_DAYS).cos();
        assert!((slow_share(rho) - 1.0).abs() < 1e-12);
        assert_eq!(slow_share(-0.2), 0.0);
        assert!((window_factor(0.0) - 1.0).abs() < 1e-12);
        let l = 300.0;
        let asym = SPRING_NEAP_DAYS / (2f64.sqrt() * std::f64::consts::PI * l);
        assert!((window_factor(l) / asym - 1.0).abs() < 1e-3);
        // White scatter of σ over n days: u = σ/√n within sampling error.
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let nd = Normal::new(0.0, 0.1).unwrap();
        let s: Vec<(usize, f64)> = (0..400).map(|i| (i, nd.sample(&mut rng))).collect();
        let u = u_of_day_mean(&s, 400.0 * TIDAL_DAY_S / 86_400.0);
        assert!((u / (0.1 / 20.0) - 1.0).abs() < 0.15, "{u}");
    }
}
