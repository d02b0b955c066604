//! High and low waters of an observed record, classified within each tidal day.
//!
//! # Method
//! 1. **Segments and grid.** The finite samples are split into segments wherever two
//!    consecutive ones are further apart than `max_gap_s`; each segment is put on a regular grid
//!    of the record's median step by linear interpolation (short holes, NaN readings included,
//!    are bridged; nothing is bridged across a gap).
//! 2. **Light smoothing.** Each segment's grid is low-passed with the zero-phase filter of
//!    [`crate::compute::lowpass`] (cut-off `cutoff_min`, 30 min by default), which removes waves
//!    and seiches without shifting the tide in time.
//! 3. **Noise and threshold.** The record's noise σ is estimated robustly from the second
//!    differences of the raw samples at the regular step (for white noise the variance of
//!    `x[i−1] − 2x[i] + x[i+1]` is 6σ²; the tide's own curvature is far below it at 1- to 6-min
//!    steps): σ = 1.4826 · MAD / √6. The noise left in the smoothed series is σ times the filter's
//!    white-noise gain (√Σw², measured on an impulse). A turning point must stand
//!    `threshold_k` (5) times that above (or below) the smoothed series on both sides, never less
//!    than `threshold_floor_m` (5 mm, a gauge's resolution of 1 mm five times over).
//! 4. **Turning points.** A hysteresis ("zig-zag") pass over the smoothed series confirms a high
//!    water once the series has fallen the threshold below the running maximum, and a low water
//!    likewise; a candidate at a segment's start also needs the series before it to differ by the
//!    threshold, so a record that starts on a falling tide gives no false high water.
//! 5. **One per half-cycle.** Two neighbouring turning points closer than `min_separation_h`
//!    (an M2 period / 6 ≈ 2.07 h by default) are a stand's wiggle or the dip of a double high
//!    (or low) water: the pair is removed and the two neighbours of the same kinds keep the more
//!    extreme of each kind. A survivor that absorbed another of its kind within twice the
//!    separation is marked `double`, with the other's time and height.
//! 6. **Height.** A least-squares parabola through the **raw** finite samples within
//!    `fit_half_window_min` (45 min, at least one step) of the smoothed turning point gives the
//!    time and height of the vertex ([`HeightFrom::Parabola`]); when it does not curve the right
//!    way or its vertex falls outside the window, the smoothed series's value is taken
//!    ([`HeightFrom::Smoothed`]). The raw fit avoids the upward bias of the maximum of a noisy
//!    smoothed top.
//! 7. **Tidal days.** The record is cut into tidal days of 24.8412 h (two M2 periods, the mean
//!    lunar day). The boundaries are placed in the middle of the widest empty stretch of the
//!    lunar day when every turning point's time is folded onto it, so that no high or low water
//!    sits near a boundary and each day holds one of each of the day's turning points. A day is
//!    **complete** when it lies inside one segment with at least `min_separation_h` of record on
//!    each side (so its turning points near its ends were confirmable).
//! 8. **Classification.** Within each tidal day the highest high water is the higher high water
//!    (HHW) and any other the lower high water (LHW); the lowest low water is the lower low water
//!    (LLW), any other the higher low water (HLW). A day with a single high water (a diurnal
//!    tide) calls it higher, and a single low water lower, as tabulations for MHHW and MLLW
//!    commonly do (NOAA CO-OPS, Tidal Datums Handbook, 2003: from memory).
//!
//! # References
//! Turning points of a lightly filtered record and the higher/lower classification: common
//! practice (DOMAIN §6). The robust scale 1.4826 · MAD: textbook. The lunar day: twice the M2
//! period of 12.4206 h.

use crate::compute::harmonic::HighLowWater;
use crate::compute::lowpass::lowpass_zero_phase;

/// The mean lunar day (two M2 periods), seconds: 720° / 28.9841042 °/h.
pub const TIDAL_DAY_S: f64 = 720.0 / 28.984_104_2 * 3600.0;

/// The M2 period, hours.
pub const M2_PERIOD_H: f64 = 360.0 / 28.984_104_2;

/// How high and low waters are found.
#[derive(Debug, Clone, PartialEq)]
pub struct ExtremaSettings {
    /// Cut-off period of the smoothing low-pass, minutes.
    pub cutoff_min: f64,
    /// Least time between a high and the next low water (and back), hours.
    pub min_separation_h: f64,
    /// Longest interval between samples bridged on the grid, seconds.
    pub max_gap_s: f64,
    /// Half-width of the parabola fit around a turning point, minutes (at least one step).
    pub fit_half_window_min: f64,
    /// The threshold in units of the smoothed series's noise.
    pub threshold_k: f64,
    /// The least threshold, metres.
    pub threshold_floor_m: f64,
}

impl Default for ExtremaSettings {
    fn default() -> Self {
        ExtremaSettings {
            cutoff_min: 30.0,
            min_separation_h: M2_PERIOD_H / 6.0,
            max_gap_s: 1800.0,
            fit_half_window_min: 45.0,
            threshold_k: 5.0,
            threshold_floor_m: 0.005,
        }
    }
}

/// Higher or lower of its kind within its tidal day.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum DayClass {
    /// HHW for a high water, HLW for a low water.
    Higher,
    /// LHW for a high water, LLW for a low water.
    Lower,
}

/// Where a turning point's time and height come from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum HeightFrom {
    /// The vertex of a least-squares parabola through the raw samples near it.
    Parabola,
    /// The smoothed series at its turning sample.
    Smoothed,
}

impl HeightFrom {
    /// The word written in outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            HeightFrom::Parabola => "parabola",
            HeightFrom::Smoothed => "smoothed",
        }
    }
}

/// One observed high or low water.
#[derive(Debug, Clone, PartialEq)]
pub struct Extremum {
    /// Time (UTC s), height (m) and kind.
    pub water: HighLowWater,
    /// Standard uncertainty of the height, metres (the fit's residual scatter, or the smoothed
    /// series's noise).
    pub u_height_m: f64,
    /// How the height was found.
    pub height_from: HeightFrom,
    /// Higher or lower within its tidal day.
    pub class: DayClass,
    /// Index of its tidal day in [`Tabulation::days`].
    pub day: usize,
    /// The other turning point of a double high (or low) water absorbed into this one:
    /// (time UTC s, smoothed height m).
    pub double: Option<(f64, f64)>,
}

impl Extremum {
    /// `HHW`, `LHW`, `HLW` or `LLW`.
    pub fn label(&self) -> &'static str {
        match (self.water.high, self.class) {
            (true, DayClass::Higher) => "HHW",
            (true, DayClass::Lower) => "LHW",
            (false, DayClass::Higher) => "HLW",
            (false, DayClass::Lower) => "LLW",
        }
    }
}

/// One tidal day.
#[derive(Debug, Clone, PartialEq)]
pub struct TidalDay {
    /// Start, UTC seconds (the day spans [`TIDAL_DAY_S`]).
    pub start_s: f64,
    /// Whether the record covers it whole (see the module doc).
    pub complete: bool,
    /// Mean level over the day (the time integral of the linearly interpolated record / the
    /// day's length), metres; complete days only.
    pub mean_level_m: Option<f64>,
}

/// The high and low waters of a record.
#[derive(Debug, Clone, PartialEq)]
pub struct Tabulation {
    /// In time order.
    pub extrema: Vec<Extremum>,
    /// Every tidal day from the one holding the first sample to the one holding the last.
    pub days: Vec<TidalDay>,
    /// The record's noise (standard deviation of the raw samples about the tide), metres.
    pub noise_m: f64,
    /// The height a turning point must stand above its neighbours, metres.
    pub threshold_m: f64,
    /// The regular step, seconds.
    pub step_s: f64,
    /// Finite samples used.
    pub samples: usize,
    /// First and last finite sample, UTC seconds.
    pub span_s: (f64, f64),
}

/// Why a record cannot be tabulated.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ExtremaError {
    /// Fewer than three finite samples.
    #[error("the record holds {n} finite samples, too few for high and low waters")]
    TooFewSamples {
        /// Finite samples.
        n: usize,
    },
    /// Times are not strictly increasing.
    #[error("times must increase strictly: sample {index} is not after the one before")]
    NotIncreasing {
        /// Index of the sample.
        index: usize,
    },
    /// A setting is out of range.
    #[error("setting {name} = {value} is out of range")]
    BadSetting {
        /// The setting.
        name: &'static str,
        /// Its value.
        value: f64,
    },
}

/// The offset (in steps, within ±1) of the vertex of the parabola through three equally spaced
/// values `a`, `b`, `c` from the middle one; `None` when they lie on a line.
pub fn parabola_vertex_offset(a: f64, b: f64, c: f64) -> Option<f64> {
    let den = a - 2.0 * b + c;
    (den != 0.0).then(|| (0.5 * (a - c) / den).clamp(-1.0, 1.0))
}

/// A regular piece of the record: grid times `t0 + i·step`, interpolated raw levels, smoothed.
struct Segment {
    t0_s: f64,
    raw_m: Vec<f64>,
    smooth_m: Vec<f64>,
}

impl Segment {
    fn t(&self, i: usize, step_s: f64) -> f64 {
        self.t0_s + i as f64 * step_s
    }
    fn end_s(&self, step_s: f64) -> f64 {
        self.t(self.raw_m.len() - 1, step_s)
    }
}

/// A turning point in the making: grid index, kind, and an absorbed partner.
#[derive(Debug, Clone, Copy)]
struct Turn {
    i: usize,
    high: bool,
    y: f64,
    double: Option<(f64, f64)>,
}

/// High and low waters of an observed record (see the module doc for the method).
///
/// # Units
/// `times_s` UTC seconds, strictly increasing; `heights_m` metres (NaN or infinite: no reading).
pub fn tabulate(
    times_s: &[f64],
    heights_m: &[f64],
    s: &ExtremaSettings,
) -> Result<Tabulation, ExtremaError> {
    for (name, value) in [
        ("cutoff_min", s.cutoff_min),
        ("min_separation_h", s.min_separation_h),
        ("max_gap_s", s.max_gap_s),
        ("fit_half_window_min", s.fit_half_window_min),
        ("threshold_k", s.threshold_k),
    ] {
        if !(value.is_finite() && value > 0.0) {
            return Err(ExtremaError::BadSetting { name, value });
        }
    }
    if !(s.threshold_floor_m.is_finite() && s.threshold_floor_m >= 0.0) {
        return Err(ExtremaError::BadSetting {
            name: "threshold_floor_m",
            value: s.threshold_floor_m,
        });
    }
    let n_all = times_s.len().min(heights_m.len());
    for i in 1..n_all {
        if times_s[i].partial_cmp(&times_s[i - 1]) != Some(std::cmp::Ordering::Greater) {
            return Err(ExtremaError::NotIncreasing { index: i });
        }
    }
    let (t, h): (Vec<f64>, Vec<f64>) = times_s[..n_all]
        .iter()
        .zip(&heights_m[..n_all])
        .filter(|(t, h)| t.is_finite() && h.is_finite())
        .map(|(t, h)| (*t, *h))
        .unzip();
    if t.len() < 3 {
        return Err(ExtremaError::TooFewSamples { n: t.len() });
    }
    let mut dts: Vec<f64> = t.windows(2).map(|w| w[1] - w[0]).collect();
    dts.sort_by(f64::total_cmp);
    let step_s = dts[dts.len() / 2];
    let noise_m = noise_sd(&t, &h, step_s);
    let cutoff_min = s.cutoff_min;
    let gain = smoothed_noise_gain(cutoff_min, step_s);
    let threshold_m = (s.threshold_k * noise_m * gain).max(s.threshold_floor_m);
    let segments = segments(&t, &h, step_s, s.max_gap_s.max(step_s * 1.01), cutoff_min);
    let min_sep_s = s.min_separation_h * 3600.0;
    // Turning points of each segment.
    let mut found: Vec<(usize, Turn)> = Vec::new();
    for (k, seg) in segments.iter().enumerate() {
        let turns = merge_close(zigzag(&seg.smooth_m, threshold_m), seg, step_s, min_sep_s);
        found.extend(turns.into_iter().map(|x| (k, x)));
    }
    // Heights from the raw samples.
    let half_w = (s.fit_half_window_min * 60.0).max(step_s * 1.01);
    let mut extrema: Vec<Extremum> = found
        .iter()
        .map(|(k, x)| {
            let seg = &segments[*k];
            let tc = seg.t(x.i, step_s);
            let (water, u_height_m, height_from) = refine(&t, &h, tc, x.high, half_w)
                .map(|(w, u)| (w, u, HeightFrom::Parabola))
                .unwrap_or((
                    HighLowWater {
                        t_s: tc,
                        height_m: x.y,
                        high: x.high,
                    },
                    noise_m * gain,
                    HeightFrom::Smoothed,
                ));
            Extremum {
                water,
                u_height_m,
                height_from,
                class: DayClass::Lower,
                day: 0,
                double: x.double,
            }
        })
        .collect();
    extrema.sort_by(|a, b| a.water.t_s.total_cmp(&b.water.t_s));
    // Tidal days.
    let span_s = (t[0], t[t.len() - 1]);
    let phase_s = day_phase(extrema.iter().map(|e| e.water.t_s));
    let first_day = ((span_s.0 - phase_s) / TIDAL_DAY_S).floor();
    let last_day = ((span_s.1 - phase_s) / TIDAL_DAY_S).floor();
    let mut days = Vec::new();
    let mut d = first_day;
    while d <= last_day {
        let start_s = phase_s + d * TIDAL_DAY_S;
        let end_s = start_s + TIDAL_DAY_S;
        let holder = segments
            .iter()
            .find(|g| g.t0_s + min_sep_s <= start_s && end_s + min_sep_s <= g.end_s(step_s));
        days.push(TidalDay {
            start_s,
            complete: holder.is_some(),
            mean_level_m: holder.map(|g| mean_over(g, step_s, start_s, end_s)),
        });
        d += 1.0;
    }
    let last = (days.len() - 1) as f64;
    for e in &mut extrema {
        e.day =
            (((e.water.t_s - phase_s) / TIDAL_DAY_S).floor() - first_day).clamp(0.0, last) as usize;
    }
    classify(&mut extrema);
    Ok(Tabulation {
        extrema,
        days,
        noise_m,
        threshold_m,
        step_s,
        samples: t.len(),
        span_s,
    })
}

/// Robust standard deviation of the noise from the second differences at the regular step.
fn noise_sd(t: &[f64], h: &[f64], step_s: f64) -> f64 {
    let tol = 0.01 * step_s;
    let mut d2: Vec<f64> = (1..t.len() - 1)
        .filter(|&i| {
            (t[i] - t[i - 1] - step_s).abs() <= tol && (t[i + 1] - t[i] - step_s).abs() <= tol
        })
        .map(|i| (h[i - 1] - 2.0 * h[i] + h[i + 1]).abs())
        .collect();
    if d2.is_empty() {
        return 0.0;
    }
    d2.sort_by(f64::total_cmp);
    let mad = d2[d2.len() / 2];
    1.4826 * mad / 6f64.sqrt()
}

/// The white-noise gain (√Σw² of the unit-gain kernel) of the smoothing at `step_s`, measured
/// by filtering an impulse.
fn smoothed_noise_gain(cutoff_min: f64, step_s: f64) -> f64 {
    let half = ((4.0 * cutoff_min * 60.0 / step_s).ceil() as usize).clamp(2, 100_000);
    let n = 2 * half + 1;
    let t: Vec<f64> = (0..n).map(|i| i as f64 * step_s).collect();
    let mut x = vec![0.0; n];
    x[half] = 1.0;
    let y = lowpass_zero_phase(&t, &x, &vec![false; n - 1], cutoff_min);
    y.iter().map(|v| v * v).sum::<f64>().sqrt()
}

/// The record cut at gaps, each piece on the regular grid and smoothed.
fn segments(t: &[f64], h: &[f64], step_s: f64, max_gap_s: f64, cutoff_min: f64) -> Vec<Segment> {
    let mut out = Vec::new();
    let mut a = 0;
    while a < t.len() {
        let mut b = a;
        while b + 1 < t.len() && t[b + 1] - t[b] <= max_gap_s {
            b += 1;
        }
        if b >= a + 2 {
            let n = ((t[b] - t[a]) / step_s + 1e-9).floor() as usize + 1;
            let mut raw = Vec::with_capacity(n);
            let mut j = a;
            for i in 0..n {
                let ti = t[a] + i as f64 * step_s;
                while j + 1 < b && t[j + 1] <= ti {
                    j += 1;
                }
                let f = ((ti - t[j]) / (t[j + 1] - t[j])).clamp(0.0, 1.0);
                raw.push(h[j] + f * (h[j + 1] - h[j]));
            }
            let grid: Vec<f64> = (0..n).map(|i| t[a] + i as f64 * step_s).collect();
            let smooth = lowpass_zero_phase(&grid, &raw, &vec![false; n - 1], cutoff_min);
            out.push(Segment {
                t0_s: t[a],
                raw_m: raw,
                smooth_m: smooth,
            });
        }
        a = b + 1;
    }
    out
}

/// Turning points confirmed by a move of `threshold` on each side.
fn zigzag(y: &[f64], threshold: f64) -> Vec<Turn> {
    let turn = |i: usize, high: bool| Turn {
        i,
        high,
        y: y[i],
        double: None,
    };
    let mut out = Vec::new();
    // None: direction not yet known; Some(true): rising (tracking a maximum).
    let mut rising: Option<bool> = None;
    let (mut imax, mut imin, mut cur) = (0, 0, 0);
    for i in 0..y.len() {
        match rising {
            None => {
                if y[i] > y[imax] {
                    imax = i;
                }
                if y[i] < y[imin] {
                    imin = i;
                }
                if y[imax] - y[imin] >= threshold {
                    // The first extreme counts only if the series before it differs by the
                    // threshold too.
                    if imin < imax {
                        let before = y[..imin].iter().copied().fold(f64::NEG_INFINITY, f64::max);
                        if before - y[imin] >= threshold {
                            out.push(turn(imin, false));
                        }
                        rising = Some(true);
                        cur = imax;
                    } else {
                        let before = y[..imax].iter().copied().fold(f64::INFINITY, f64::min);
                        if y[imax] - before >= threshold {
                            out.push(turn(imax, true));
                        }
                        rising = Some(false);
                        cur = imin;
                    }
                }
            }
            Some(true) => {
                if y[i] > y[cur] {
                    cur = i;
                } else if y[cur] - y[i] >= threshold {
                    out.push(turn(cur, true));
                    rising = Some(false);
                    cur = i;
                }
            }
            Some(false) => {
                if y[i] < y[cur] {
                    cur = i;
                } else if y[i] - y[cur] >= threshold {
                    out.push(turn(cur, false));
                    rising = Some(true);
                    cur = i;
                }
            }
        }
    }
    out
}

/// Removes neighbouring pairs closer than `min_sep_s`, closest first; the neighbours of the
/// same kinds keep the more extreme of each kind (see the module doc).
fn merge_close(mut v: Vec<Turn>, seg: &Segment, step_s: f64, min_sep_s: f64) -> Vec<Turn> {
    let t = |x: &Turn| seg.t(x.i, step_s);
    let more_extreme = |a: &Turn, b: &Turn| if a.high { a.y > b.y } else { a.y < b.y };
    loop {
        let Some((j, _)) = v
            .windows(2)
            .enumerate()
            .map(|(j, w)| (j, t(&w[1]) - t(&w[0])))
            .filter(|(_, dt)| *dt < min_sep_s)
            .min_by(|a, b| a.1.total_cmp(&b.1))
        else {
            return v;
        };
        let (a, b) = (v[j], v[j + 1]);
        let has_x = j > 0;
        let has_y = j + 2 < v.len();
        match (has_x, has_y) {
            (false, false) => {
                v.clear();
                return v;
            }
            // At an end, the outer one of the pair is the artefact: drop it alone.
            (false, true) => {
                v.remove(j);
                continue;
            }
            (true, false) => {
                v.remove(j + 1);
                continue;
            }
            (true, true) => {}
        }
        for (keep, gone) in [(j - 1, b), (j + 2, a)] {
            let kept = v[keep];
            let near = (t(&kept) - t(&gone)).abs() <= 2.0 * min_sep_s;
            let (winner, loser) = if more_extreme(&gone, &kept) {
                (gone, kept)
            } else {
                (kept, gone)
            };
            let mut w = winner;
            if near {
                w.double = Some((t(&loser), loser.y));
            }
            v[keep] = w;
        }
        v.drain(j..j + 2);
    }
}

/// The vertex of a least-squares parabola through the raw samples within `half_w` of `tc`, and
/// the standard uncertainty of its height; `None` when it does not curve as a `high` (or low)
/// water does, or its vertex lies outside the window.
fn refine(t: &[f64], h: &[f64], tc: f64, high: bool, half_w: f64) -> Option<(HighLowWater, f64)> {
    let lo = t.partition_point(|&x| x < tc - half_w);
    let hi = t.partition_point(|&x| x <= tc + half_w);
    let m = hi.saturating_sub(lo);
    if m < 3 {
        return None;
    }
    // Normal equations of h = c0 + c1 τ + c2 τ², τ = (t − tc)/half_w.
    let mut a = nalgebra::Matrix3::<f64>::zeros();
    let mut r = nalgebra::Vector3::<f64>::zeros();
    for k in lo..hi {
        let tau = (t[k] - tc) / half_w;
        let p = nalgebra::Vector3::new(1.0, tau, tau * tau);
        a += p * p.transpose();
        r += p * h[k];
    }
    let c = a.cholesky()?.solve(&r);
    if (high && c[2] >= 0.0) || (!high && c[2] <= 0.0) {
        return None;
    }
    let tau_v = -c[1] / (2.0 * c[2]);
    if tau_v.is_nan() || tau_v.abs() > 1.0 {
        return None;
    }
    let height_m = c[0] + c[1] * tau_v + c[2] * tau_v * tau_v;
    let rss: f64 = (lo..hi)
        .map(|k| {
            let tau = (t[k] - tc) / half_w;
            (h[k] - (c[0] + c[1] * tau + c[2] * tau * tau)).powi(2)
        })
        .sum();
    // The fitted value near the middle of the window has variance about (9/4)·σ²/m for a
    // parabola fitted to m evenly spread samples (from memory); with three samples the fit is
    // exact and says nothing of σ.
    let u = if m > 3 {
        let s = (rss / (m - 3) as f64).sqrt();
        1.5 * s / (m as f64).sqrt()
    } else {
        0.0
    };
    Some((
        HighLowWater {
            t_s: tc + tau_v * half_w,
            height_m,
            high,
        },
        u,
    ))
}

/// The boundary phase of the tidal days: the middle of the widest empty stretch of the lunar
/// day when the turning points' times are folded onto it (0 when there are none).
fn day_phase(times: impl Iterator<Item = f64>) -> f64 {
    let mut ph: Vec<f64> = times.map(|t| t.rem_euclid(TIDAL_DAY_S)).collect();
    if ph.is_empty() {
        return 0.0;
    }
    ph.sort_by(f64::total_cmp);
    let mut best = (ph[0] + TIDAL_DAY_S - ph[ph.len() - 1], ph[ph.len() - 1]);
    for w in ph.windows(2) {
        if w[1] - w[0] > best.0 {
            best = (w[1] - w[0], w[0]);
        }
    }
    (best.1 + best.0 / 2.0).rem_euclid(TIDAL_DAY_S)
}

/// The time mean of the linearly interpolated grid over `[a, b]`, which the segment covers.
fn mean_over(g: &Segment, step_s: f64, a: f64, b: f64) -> f64 {
    let at = |x: f64| {
        let p = (x - g.t0_s) / step_s;
        let i = (p.floor() as usize).min(g.raw_m.len() - 2);
        let f = p - i as f64;
        g.raw_m[i] + f * (g.raw_m[i + 1] - g.raw_m[i])
    };
    let ia = ((a - g.t0_s) / step_s).ceil() as usize;
    let ib = ((b - g.t0_s) / step_s).floor() as usize;
    let mut sum = 0.0;
    let mut prev = (a, at(a));
    for i in ia..=ib {
        let x = (g.t(i, step_s), g.raw_m[i]);
        sum += 0.5 * (prev.1 + x.1) * (x.0 - prev.0);
        prev = x;
    }
    sum += 0.5 * (prev.1 + at(b)) * (b - prev.0);
    sum / (b - a)
}

/// Higher and lower of each kind within each tidal day.
fn classify(v: &mut [Extremum]) {
    let n = v.len();
    let mut start = 0;
    while start < n {
        let mut end = start;
        while end + 1 < n && v[end + 1].day == v[start].day {
            end += 1;
        }
        for high in [true, false] {
            let best = (start..=end)
                .filter(|&i| v[i].water.high == high)
                .min_by(|&a, &b| {
                    let (x, y) = (v[a].water.height_m, v[b].water.height_m);
                    if high {
                        y.total_cmp(&x)
                    } else {
                        x.total_cmp(&y)
                    }
                });
            let members: Vec<usize> = (start..=end).filter(|&i| v[i].water.high == high).collect();
            for i in members {
                let extreme = Some(i) == best;
                v[i].class = match (high, extreme) {
                    (true, true) | (false, false) => DayClass::Higher,
                    (true, false) | (false, true) => DayClass::Lower,
                };
            }
        }
        start = end + 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A sampled function on `n` samples every `step_s` from t0.
    fn sample(t0: f64, step_s: f64, n: usize, f: impl Fn(f64) -> f64) -> (Vec<f64>, Vec<f64>) {
        let t: Vec<f64> = (0..n).map(|i| t0 + i as f64 * step_s).collect();
        let h = t.iter().map(|&x| f(x)).collect();
        (t, h)
    }

    const W_M2: f64 = 28.984_104_2 * std::f64::consts::PI / 180.0 / 3600.0;

    /// A pure M2 cosine: high waters at its crests, exactly H above Z0 (analytic), one each
    /// per M2 period, HHW/LHW alternating only by round-off (the two crests of a lunar day are
    /// equal), times within a second of the crests.
    #[test]
    fn pure_m2_crests_and_troughs() {
        let (t, h) = sample(1.78e9, 360.0, 10 * 240, |x| 1.5 + 1.2 * (W_M2 * x).cos());
        let tab = tabulate(&t, &h, &ExtremaSettings::default()).unwrap();
        let span_h = (t[t.len() - 1] - t[0]) / 3600.0;
        let expected = 2.0 * span_h / M2_PERIOD_H;
        let n = tab.extrema.len() as f64;
        // Every crest and trough of the record but those at its very ends (analytic count).
        assert!((n - expected).abs() <= 2.0, "{n} vs {expected}");
        for w in tab.extrema.windows(2) {
            assert_ne!(w[0].water.high, w[1].water.high);
        }
        for e in &tab.extrema {
            let want = if e.water.high { 2.7 } else { 0.3 };
            assert!((e.water.height_m - want).abs() < 2e-4, "{e:?}");
            assert_eq!(e.height_from, HeightFrom::Parabola);
            // Phase at the vertex: a multiple of π (analytic).
            let ph = (W_M2 * e.water.t_s).rem_euclid(std::f64::consts::PI);
            let off = ph.min(std::f64::consts::PI - ph) / W_M2;
            assert!(off < 1.0, "{off} s off the crest");
        }
        assert!(tab.days.iter().filter(|d| d.complete).count() >= 7);
    }

    /// One-minute record with 4 cm Gaussian noise, a 90-min stand at every high water and a
    /// secondary crest a few centimetres below the stand about 2.3 h after it (a Gaussian bump on
    /// the falling tide): exactly one high and one low water per half-cycle (analytic count: one
    /// of each per M2 period), every high water marked double, no low water.
    #[test]
    fn noise_stand_and_double_high_water() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let noise = Normal::new(0.0, 0.04).unwrap();
        let t0 = 1.78e9;
        let (t, mut h) = sample(t0, 60.0, 6 * 1440, |x| {
            let c = (W_M2 * (x - t0)).cos();
            // A stand: the crest flattened to its value at ±45 min.
            let top = (W_M2 * 2700.0).cos();
            let base = 1.0 * c.min(top);
            // A secondary crest: a Gaussian bump 2.5 h after each crest, reaching about 5 cm
            // below the flattened top.
            let phase = (W_M2 * (x - t0)).rem_euclid(std::f64::consts::TAU);
            let after_h = phase / W_M2 / 3600.0;
            let bump = 0.6 * (-((after_h - 2.5) / 0.5).powi(2)).exp();
            2.0 + base + bump
        });
        for v in h.iter_mut() {
            *v += noise.sample(&mut rng);
        }
        let tab = tabulate(&t, &h, &ExtremaSettings::default()).unwrap();
        let hw: Vec<_> = tab.extrema.iter().filter(|e| e.water.high).collect();
        let lw: Vec<_> = tab.extrema.iter().filter(|e| !e.water.high).collect();
        let span_h = 6.0 * 24.0;
        let cycles = span_h / M2_PERIOD_H;
        for (what, n) in [("high", hw.len()), ("low", lw.len())] {
            assert!(
                (n as f64 - cycles).abs() <= 1.0,
                "{n} {what} waters, {cycles:.2} cycles"
            );
        }
        // Neighbouring turning points alternate and lie about half an M2 period apart.
        for w in tab.extrema.windows(2) {
            assert_ne!(w[0].water.high, w[1].water.high);
            let dt_h = (w[1].water.t_s - w[0].water.t_s) / 3600.0;
            assert!(dt_h > 3.0 && dt_h < 9.5, "{dt_h} h");
        }
        assert!(
            hw.iter().filter(|e| e.double.is_some()).count() >= hw.len() - 1,
            "the secondary crests are reported"
        );
        assert!(lw.iter().all(|e| e.double.is_none()));
        // The noise estimate is the Gaussian's σ (second differences of white noise).
        assert!((tab.noise_m - 0.04).abs() < 0.004, "{}", tab.noise_m);
    }

    /// A record starting on a falling tide, a gap of 3 h and NaN readings: no turning point at
    /// the start or at the gap's edges, and the days crossing the gap are incomplete.
    #[test]
    fn ends_gaps_and_nans() {
        let t0 = 1.78e9 + 0.1 * M2_PERIOD_H * 3600.0;
        let (mut t, mut h) = sample(t0, 360.0, 4 * 240, |x| 1.0 + (W_M2 * x).cos());
        h[100] = f64::NAN;
        h[101] = f64::NAN;
        // A 3-hour gap in the second day.
        let g0 = 300;
        t.drain(g0..g0 + 30);
        h.drain(g0..g0 + 30);
        let tab = tabulate(&t, &h, &ExtremaSettings::default()).unwrap();
        let gap = (t[g0 - 1], t[g0]);
        for e in &tab.extrema {
            assert!(e.water.t_s > t[0] + 600.0 && e.water.t_s < t[t.len() - 1] - 600.0);
            assert!(e.water.t_s < gap.0 - 600.0 || e.water.t_s > gap.1 + 600.0);
        }
        for d in &tab.days {
            let end = d.start_s + TIDAL_DAY_S;
            if d.start_s < gap.1 && end > gap.0 {
                assert!(!d.complete);
            }
            assert_eq!(d.complete, d.mean_level_m.is_some());
        }
        assert!(tab.days.iter().any(|d| d.complete));
    }

    /// A diurnal tide (K1 alone): one high and one low water per day, classified higher and
    /// lower (the convention of the module doc).
    #[test]
    fn diurnal_day_single_waters() {
        let w = 15.041_068_6_f64.to_radians() / 3600.0;
        let (t, h) = sample(1.78e9, 360.0, 8 * 240, |x| 1.0 + 0.8 * (w * x).cos());
        let tab = tabulate(&t, &h, &ExtremaSettings::default()).unwrap();
        for e in &tab.extrema {
            let d = &tab.days[e.day];
            if d.complete {
                let same = tab
                    .extrema
                    .iter()
                    .filter(|x| x.day == e.day && x.water.high == e.water.high)
                    .count();
                if same == 1 {
                    assert_eq!(e.label(), if e.water.high { "HHW" } else { "LLW" });
                }
            }
        }
        assert!(tab.extrema.iter().any(|e| e.label() == "HHW"));
    }

    #[test]
    fn parabola_vertex_of_three_values() {
        // y = −(x − 0.25)²: at −1, 0, 1 → −1.5625, −0.0625, −0.5625; vertex at +0.25 (algebra).
        let v = parabola_vertex_offset(-1.5625, -0.0625, -0.5625).unwrap();
        assert!((v - 0.25).abs() < 1e-12);
        assert_eq!(parabola_vertex_offset(1.0, 2.0, 3.0), None);
    }
}
