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
//! split with the series's autocorrelations at lags of 1 to 4 tidal days into
//! * two slow parts, sinusoids of the tide's two modulation periods: the fortnight (the
//!   spring–neap cycle, 14.77 d, standing too for the diurnal inequality's 13.66 d), which
//!   modulates the high and low waters, and the tropical month (27.32 d), the period of the
//!   diurnal constituents' leakage into a lunar-day **mean** level, which modulates MSL (and
//!   through the diurnal inequality MTL, DTL, MLLW) more than S2's leakage at 14.77 d does;
//! * a white part (noise, weather, tabulation), the rest.
//!
//! Over a window of length `L` a sinusoid of variance `V` and period `P` keeps the share
//! `1 − G` of its variance about the window's own mean and puts `G` into the window's mean, with
//! `G = g(L)²`, `g(L) = 1/√(1 + 2(πL/P)²)`: the RMS of `|sinc(πL/P)|` over window lengths
//! (analytic: √V·|sinc(πL/P)| is the RMS difference between the window's mean and the long-run
//! mean at a random phase; `g` has its limits 1 for a short window and `P/(√2·π·L)` for a long
//! one). Its autocorrelation about the window's mean at lag `k` days is then
//! `(cos(2πkT/P) − G)/(1 − G)` (T the tidal day) and white scatter's is 0. The shares `σ_f`,
//! `σ_m` of the observed variance `s²` are fitted to the observed autocorrelations by least
//! squares (on a grid of 0.01, their sum at most 1), so
//!
//! ```text
//! u² = σ_f s² · G_f/(1 − G_f) + σ_m s² · G_m/(1 − G_m) + (1 − σ_f − σ_m) s² / n
//! ```
//!
//! (the factors `1/(1 − G)` restore the slow variance a short window under-states on average),
//! with `n` the days in the series and `L` the span of the complete days. This is the error
//! relative to the mean over a long record of the **same** tide (a year about the record, in the
//! tests). **Not covered**, and to be added by whoever adopts the datum: the 18.61-year nodal
//! modulation (M2's amplitude varies by ±3.7 %, K1's by ±11 %, O1's by ±19 %, so a month's MN
//! differs from the epoch's by up to ±3.7 % of it); seasonal changes of mean level (SA, SSA,
//! river flow); modulations slower than the anomalistic month; and any error of the gauge zero.
//! The correction `1/(1 − G)` holds on average over phases: a record shorter than about two
//! periods that happens to sit on a crest of the slow wave shows little scatter yet a mean far
//! from the long-run one, so the mean levels (whose period is the longest) keep heavier tails
//! than a normal error (docs/datums.md gives the measured coverage). Records shorter than the
//! spring–neap period sample a fraction of a cycle: the stated `u` is then a lower bound. A datum referred to an epoch is transferred from a control gauge (DOMAIN §6)
//! rather than taken from a short record as it is.
//!
//! # References
//! Datum definitions: NOAA CO-OPS, *Computational Techniques for Tidal Datums Handbook*, NOAA
//! Special Publication NOS CO-OPS 2 (2003), from memory. The mean of a sinusoid over a window
//! and the autocorrelation of a sinusoid: analytic. Nodal factor ranges: Pugh (1987), from
//! memory.

use crate::compute::astro::{astro_at, equilibrium_argument_deg, nodal_args, nodal_fu_with};
use crate::compute::extrema::{Tabulation, TIDAL_DAY_S};
use crate::compute::harmonic::HarmonicConstants;
use crate::compute::lat::{lat_hat, LatHatError};

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

/// The fortnightly modulation period, days: the spring–neap cycle (MSf), which also stands for
/// the diurnal inequality's 13.66 days (Mf) a few days of lags cannot tell from it.
pub const FORTNIGHT_DAYS: f64 = SPRING_NEAP_DAYS;
/// The monthly modulation period, days: the tropical month (360° / 0.5490165 °/h), the period
/// of the diurnal constituents' leakage into a lunar-day mean, next to the anomalistic month
/// (27.55 d) of N2.
pub const MONTH_DAYS: f64 = 360.0 / 0.549_016_5 / 24.0;
/// Lags (tidal days) whose autocorrelations fix the slow parts' shares.
pub const LAGS: usize = 4;

/// `G(L, P) = g(L, P)²` with `g = 1/√(1 + 2(πL/P)²)`: the share of a sinusoid's variance, of
/// period `period_days`, that reaches the mean over a window of `length_days` (smoothed over
/// window lengths; [module doc](self)).
pub fn window_share(length_days: f64, period_days: f64) -> f64 {
    let x = std::f64::consts::PI * length_days / period_days;
    1.0 / (1.0 + 2.0 * x * x)
}

/// The slow parts fitted to a day series's autocorrelations: the shares of the observed
/// variance that are a fortnightly and a monthly sinusoid ([module doc](self)).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SlowParts {
    /// Share at [`FORTNIGHT_DAYS`], in [0, 1].
    pub fortnight: f64,
    /// Share at [`MONTH_DAYS`], in [0, 1 − fortnight].
    pub month: f64,
}

/// The expected autocorrelation at lag `k` tidal days of a sinusoid of period `period_days`
/// over a window of `length_days`, about the window's own mean: `(cos(2πkT/P) − G)/(1 − G)`
/// ([module doc](self)).
pub fn model_autocorrelation(period_days: f64, length_days: f64, k: usize) -> f64 {
    let t_days = TIDAL_DAY_S / 86_400.0;
    let g = window_share(length_days, period_days);
    let c = (std::f64::consts::TAU * k as f64 * t_days / period_days).cos();
    (c - g) / (1.0 - g)
}

/// Fits [`SlowParts`] to the autocorrelations `r[k-1]` at lags `k = 1..` (`None` where no pair
/// of days exists): the shares, on a grid of 0.01 with their sum at most 1, of least squared
/// misfit. With no lag known, all white.
pub fn fit_slow_parts(r: &[Option<f64>], length_days: f64) -> SlowParts {
    let known: Vec<(f64, f64, f64)> = r
        .iter()
        .enumerate()
        .filter_map(|(i, v)| {
            v.map(|v| {
                (
                    v,
                    model_autocorrelation(FORTNIGHT_DAYS, length_days, i + 1),
                    model_autocorrelation(MONTH_DAYS, length_days, i + 1),
                )
            })
        })
        .collect();
    let mut best = (
        f64::INFINITY,
        SlowParts {
            fortnight: 0.0,
            month: 0.0,
        },
    );
    if known.is_empty() {
        return best.1;
    }
    for i in 0..=100 {
        for j in 0..=(100 - i) {
            let (a, b) = (i as f64 / 100.0, j as f64 / 100.0);
            let miss: f64 = known
                .iter()
                .map(|(v, f, m)| (v - a * f - b * m).powi(2))
                .sum();
            // Ties go to the larger monthly share (the larger uncertainty).
            if miss < best.0 - 1e-15 || (miss <= best.0 + 1e-15 && b > best.1.month) {
                best = (
                    miss.min(best.0),
                    SlowParts {
                        fortnight: a,
                        month: b,
                    },
                );
            }
        }
    }
    best.1
}

/// Autocorrelations of a day series `(day index, value)` at lags 1..=[`LAGS`] tidal days, over
/// pairs of days exactly that far apart (a gap breaks the pairs), about the series's mean and
/// divided by its population variance; `None` for a lag without pairs.
pub fn day_autocorrelations(s: &[(usize, f64)]) -> Vec<Option<f64>> {
    let n = s.len();
    let m = s.iter().map(|x| x.1).sum::<f64>() / n as f64;
    let var_pop = s.iter().map(|x| (x.1 - m).powi(2)).sum::<f64>() / n as f64;
    (1..=LAGS)
        .map(|k| {
            let (mut c, mut pairs) = (0.0, 0usize);
            for (i, a) in s.iter().enumerate() {
                if let Some(b) = s[i + 1..].iter().take(k).find(|b| b.0 == a.0 + k) {
                    c += (a.1 - m) * (b.1 - m);
                    pairs += 1;
                }
            }
            (pairs > 0 && var_pop > 0.0).then(|| c / pairs as f64 / var_pop)
        })
        .collect()
}

/// The standard uncertainty of the mean of a day series `(day index, value)` spanning
/// `length_days` ([module doc](self)):
/// `u² = σ_f s² G_f/(1 − G_f) + σ_m s² G_m/(1 − G_m) + (1 − σ_f − σ_m) s²/n`.
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
    let slow = fit_slow_parts(&day_autocorrelations(s), length_days);
    let gf = window_share(length_days, FORTNIGHT_DAYS);
    let gm = window_share(length_days, MONTH_DAYS);
    let white = (1.0 - slow.fortnight - slow.month).max(0.0);
    (slow.fortnight * var * gf / (1.0 - gf)
        + slow.month * var * gm / (1.0 - gm)
        + white * var / n as f64)
        .sqrt()
}

/// Standard uncertainties of harmonic constants, in the order of the constants' constituents.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ConstantUncertainties {
    /// u of Z0, metres.
    pub u_z0_m: f64,
    /// u of each amplitude H, metres.
    pub u_amplitude_m: Vec<f64>,
    /// u of each phase lag G, degrees.
    pub u_phase_deg: Vec<f64>,
}

/// A level from harmonic constants, metres on the constants' datum, with its standard
/// uncertainty and the instant it occurs (`None` for Z0).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HarmonicLevel {
    /// The level, metres.
    pub value_m: f64,
    /// Its standard uncertainty, metres.
    pub u_m: f64,
    /// When it occurs, UTC seconds.
    pub at_s: Option<f64>,
}

/// LAT, HAT and Z0 from harmonic constants.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HarmonicDatums {
    /// Lowest astronomical tide.
    pub lat: HarmonicLevel,
    /// Highest astronomical tide.
    pub hat: HarmonicLevel,
    /// The constants' mean level.
    pub z0: HarmonicLevel,
    /// Start of the prediction, UTC seconds.
    pub start_s: f64,
    /// Its span, Julian years.
    pub years: f64,
    /// Its step, seconds.
    pub step_s: f64,
    /// Bound on the grid's extremes' distance from the refined ones, metres.
    pub grid_bound_m: f64,
}

/// The standard uncertainty of the predicted level at an **extreme** instant `t_s`, to first
/// order in the constants' uncertainties (taken independent):
/// `u² = u(Z0)² + Σ (f cos θ · u(H))² + (f H sin θ · u(G))²`, θ = V + u − G at `t_s`, u(G) in
/// radians. At a turning point `∂h/∂t = 0`, so the instant's own shift under a change of the
/// constants changes the extreme only to second order (the envelope theorem): the change of
/// the extreme is the change of the level at the fixed instant.
///
/// # Units
/// Metres; `u.u_phase_deg` in degrees; `t_s` UTC seconds.
pub fn u_of_level_at(k: &HarmonicConstants, u: &ConstantUncertainties, t_s: f64) -> f64 {
    let a = astro_at(t_s);
    let o = nodal_args(&a);
    let mut var = u.u_z0_m.powi(2);
    for (i, (c, h, g)) in k.constituents.iter().enumerate() {
        let (f, nu) = nodal_fu_with(c, &o);
        let th = (equilibrium_argument_deg(c, &a) + nu - g).to_radians();
        let uh = u.u_amplitude_m.get(i).copied().unwrap_or(0.0);
        let ug = u.u_phase_deg.get(i).copied().unwrap_or(0.0).to_radians();
        var += (f * th.cos() * uh).powi(2) + (f * h * th.sin() * ug).powi(2);
    }
    var.sqrt()
}

/// LAT and HAT over `years` (≥ 18.61) from `start_s` at `step_s` (≤ 600 s) by
/// [`crate::compute::lat::lat_hat`], each with [`u_of_level_at`] at its instant, and Z0 with
/// u(Z0).
pub fn harmonic_datums(
    k: &HarmonicConstants,
    u: &ConstantUncertainties,
    start_s: f64,
    years: f64,
    step_s: f64,
) -> Result<HarmonicDatums, LatHatError> {
    let r = lat_hat(k, start_s, years, step_s)?;
    Ok(HarmonicDatums {
        lat: HarmonicLevel {
            value_m: r.lat_m,
            u_m: u_of_level_at(k, u, r.lat_at_s),
            at_s: Some(r.lat_at_s),
        },
        hat: HarmonicLevel {
            value_m: r.hat_m,
            u_m: u_of_level_at(k, u, r.hat_at_s),
            at_s: Some(r.hat_at_s),
        },
        z0: HarmonicLevel {
            value_m: k.z0_m,
            u_m: u.u_z0_m,
            at_s: None,
        },
        start_s,
        years,
        step_s,
        grid_bound_m: r.grid_bound_m,
    })
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

    /// The model's limits: a day series that is a sinusoid of a tidal modulation period (the
    /// spring–neap 14.77 d over 60 days; the tropical month 27.32 d over only 20 days) is fitted
    /// as all slow at that period, and its stated u is the RMS error of such a window's mean
    /// over random phases, √V·|sinc(πL/P)| averaged over phases and window lengths, to 35 %;
    /// white scatter is all white, u = σ/√n within sampling error; G → 1 for a short window and
    /// → P²/(2π²L²) for a long one (analytic).
    #[test]
    fn model_limits() {
        use rand::{Rng, SeedableRng};
        use rand_distr::{Distribution, Normal};
        let t_days = TIDAL_DAY_S / 86_400.0;
        assert!((window_share(0.0, 14.0) - 1.0).abs() < 1e-12);
        let l = 300.0;
        let asym = SPRING_NEAP_DAYS.powi(2) / (2.0 * (std::f64::consts::PI * l).powi(2));
        assert!((window_share(l, SPRING_NEAP_DAYS) / asym - 1.0).abs() < 1e-3);
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        for (period, days) in [(SPRING_NEAP_DAYS, 58usize), (MONTH_DAYS, 19)] {
            let (mut sq_err, mut sq_u) = (0.0, 0.0);
            for trial in 0..200 {
                let ph: f64 = rng.gen_range(0.0..std::f64::consts::TAU);
                let n = days + trial % 5;
                let s: Vec<(usize, f64)> = (0..n)
                    .map(|i| {
                        let t = i as f64 * t_days;
                        (i, 0.1 * (std::f64::consts::TAU * t / period + ph).cos())
                    })
                    .collect();
                let length = n as f64 * t_days;
                if trial == 0 {
                    let f = fit_slow_parts(&day_autocorrelations(&s), length);
                    println!("{period} d over {days} days: fitted {f:?}");
                    let right = if period < 20.0 { f.fortnight } else { f.month };
                    assert!(right > 0.7 && f.fortnight + f.month > 0.95, "{f:?}");
                }
                let m = s.iter().map(|x| x.1).sum::<f64>() / n as f64;
                sq_err += m * m;
                sq_u += u_of_day_mean(&s, length).powi(2);
            }
            let ratio = (sq_u / sq_err).sqrt();
            println!("{period} d over {days} days: u/RMS error {ratio:.3}");
            assert!(
                (ratio - 1.0).abs() < 0.35,
                "{period} d over {days} days: u/RMS {ratio}"
            );
        }
        // White scatter of σ over n days: u = σ/√n within sampling error.
        let nd = Normal::new(0.0, 0.1).unwrap();
        let s: Vec<(usize, f64)> = (0..400).map(|i| (i, nd.sample(&mut rng))).collect();
        let u = u_of_day_mean(&s, 400.0 * t_days);
        assert!((u / (0.1 / 20.0) - 1.0).abs() < 0.15, "{u}");
    }

    /// The first-order u of LAT and HAT against a Monte Carlo: 80 draws of M2 1.0, S2 0.33,
    /// K1 0.30, O1 0.22 m with u(H) = 1 cm (2 cm for K1), u(G) = 2° (3° for O1) and u(Z0) = 5 mm,
    /// each through `lat_hat` over 18.61 years at 10 minutes; the standard deviation of the
    /// drawn LATs (HATs) is the stated u within 25 % (the sampling error of a standard deviation
    /// of 80 draws is 8 %; the rest allows for the minimum switching between near-equal spring
    /// tides, which the linearisation does not see).
    #[test]
    fn lat_u_against_monte_carlo() {
        use crate::compute::astro::constituent;
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let c = |n: &str| constituent(n).unwrap();
        let k = HarmonicConstants {
            z0_m: 2.0,
            constituents: vec![
                (c("M2"), 1.0, 40.0),
                (c("S2"), 0.33, 75.0),
                (c("K1"), 0.30, 200.0),
                (c("O1"), 0.22, 190.0),
            ],
        };
        let u = ConstantUncertainties {
            u_z0_m: 0.005,
            u_amplitude_m: vec![0.01, 0.01, 0.02, 0.01],
            u_phase_deg: vec![2.0, 2.0, 2.0, 3.0],
        };
        let t0 = 1_767_225_600.0;
        let d = harmonic_datums(&k, &u, t0, 18.61, 600.0).unwrap();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(61);
        let std = Normal::new(0.0, 1.0).unwrap();
        let (mut lats, mut hats) = (Vec::new(), Vec::new());
        for _ in 0..80 {
            let kk = HarmonicConstants {
                z0_m: k.z0_m + u.u_z0_m * std.sample(&mut rng),
                constituents: k
                    .constituents
                    .iter()
                    .enumerate()
                    .map(|(i, (c, h, g))| {
                        (
                            *c,
                            h + u.u_amplitude_m[i] * std.sample(&mut rng),
                            g + u.u_phase_deg[i] * std.sample(&mut rng),
                        )
                    })
                    .collect(),
            };
            let r = lat_hat(&kk, t0, 18.61, 600.0).unwrap();
            lats.push(r.lat_m);
            hats.push(r.hat_m);
        }
        let sd = |v: &[f64]| {
            let m = v.iter().sum::<f64>() / v.len() as f64;
            (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (v.len() - 1) as f64).sqrt()
        };
        let (sl, sh) = (sd(&lats), sd(&hats));
        println!(
            "LAT {:.4} u {:.4} (Monte Carlo {sl:.4}); HAT {:.4} u {:.4} (Monte Carlo {sh:.4})",
            d.lat.value_m, d.lat.u_m, d.hat.value_m, d.hat.u_m
        );
        assert!((sl / d.lat.u_m - 1.0).abs() < 0.25, "{sl} vs {:?}", d.lat);
        assert!((sh / d.hat.u_m - 1.0).abs() < 0.25, "{sh} vs {:?}", d.hat);
        // The first-order u exceeds u(Z0) alone: the amplitudes' part counts.
        assert!(d.lat.u_m > 0.01 && d.z0.u_m == 0.005);
    }
}
