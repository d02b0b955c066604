//! Gauge-to-gauge comparison through the zoning's correctors.
//!
//! Owns: [`Prediction`], [`CompareSettings`], [`Comparison`], [`compare`].
//!
//! A *prediction* of the tide at a place is one gauge's level carried there by a time corrector and
//! a range ratio (one feed of a zone, used alone, with the zone's mean-level form). Comparing two
//! predictions of the same place — an observed gauge against another gauge carried to it, or the
//! two feeds of a zone fed by two gauges — gives a difference series `d(t) = a(t) − b(t)`. Its
//! statistics are the standard way to catch a datum error (mean), a drifting sensor (trend), a
//! clock error (the lag that best aligns the two) and a moved gauge (a step).
//!
//! * mean, standard deviation, largest |d| and when;
//! * drift: least-squares slope of `d` against time, metres per day;
//! * best lag: the extra time corrector on `b`, searched on a 1-minute grid and refined by a
//!   parabola through the three best, that minimises the standard deviation of `d`; a positive lag
//!   means `b`'s tide reaches the place later than the zoning says (or `a`'s clock runs late);
//! * step: the largest step in `d`, with the level-shift statistic of [`super::qc`].
//!
//! A pair is flagged when |mean|, |drift| (over at least three days) or |best lag| exceed their
//! limits, or a step is found.
//!
//! # References
//! Comparing simultaneous records of neighbouring gauges through the zoning's correctors to find
//! datum and timing errors is common practice in tide-gauge quality control (field primer §3, §4.1).

use super::qc::step_statistic;

use super::series::TimeInterpolation;
use super::zoning::{FeedState, Gauge, Zone};

/// The tide at a place from one source: a zone (usually with one feed) evaluated alone.
#[derive(Debug, Clone)]
pub struct Prediction {
    /// What this is, for reports, e.g. "gauge skellan observed" or "orlick via zone VW3".
    pub label: String,
    /// The zone formula to evaluate (its feeds' weights sum to 1).
    pub zone: Zone,
}

/// Limits and search ranges.
#[derive(Debug, Clone, PartialEq)]
pub struct CompareSettings {
    /// Largest acceptable |mean difference|, metres.
    pub max_mean_m: f64,
    /// Largest acceptable |drift|, metres per day.
    pub max_drift_m_per_day: f64,
    /// Largest acceptable |best lag|, minutes.
    pub max_lag_min: f64,
    /// Lags searched, ± minutes.
    pub lag_search_min: f64,
    /// Window each side for the step statistic, minutes.
    pub shift_window_min: f64,
    /// Step threshold in robust standard deviations.
    pub shift_k: f64,
    /// Smallest step, metres.
    pub shift_min_m: f64,
    /// Length of the moving windows of the drift test, days.
    pub drift_window_days: f64,
    /// Largest acceptable drift within a window, metres per day.
    pub max_window_drift_m_per_day: f64,
}

impl CompareSettings {
    /// Defaults of the moving-window drift test: 4-day windows, 0.005 m/day (see
    /// [`window_drift`]).
    pub const DRIFT_WINDOW_DAYS: f64 = 4.0;
    /// See [`CompareSettings::DRIFT_WINDOW_DAYS`].
    pub const MAX_WINDOW_DRIFT_M_PER_DAY: f64 = 0.005;
}

/// The steepest drift of the difference within one moving window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WindowDrift {
    /// Start of the window, UTC seconds.
    pub from_s: f64,
    /// End of the window, UTC seconds.
    pub until_s: f64,
    /// Least-squares slope of the difference in the window, metres per day.
    pub rate_m_per_day: f64,
    /// Its standard error, metres per day, from the scatter of the hourly means about the line.
    pub u_rate_m_per_day: f64,
}

/// A found step in the difference series.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Step {
    /// Time of the first difference after the step, UTC seconds.
    pub at_s: f64,
    /// Size of the step, metres (after − before).
    pub size_m: f64,
}

/// The result of one comparison.
#[derive(Debug, Clone, PartialEq)]
pub struct Comparison {
    /// Label of `a`.
    pub a: String,
    /// Label of `b`.
    pub b: String,
    /// Times of the differences, UTC seconds.
    pub times_s: Vec<f64>,
    /// `a − b` at each time, metres.
    pub diff_m: Vec<f64>,
    /// Mean difference, metres.
    pub mean_m: f64,
    /// Standard deviation of the difference, metres.
    pub std_m: f64,
    /// Largest |difference|, metres.
    pub max_abs_m: f64,
    /// When the largest |difference| occurred, UTC seconds.
    pub max_abs_at_s: f64,
    /// Least-squares trend of the difference, metres per day.
    pub drift_m_per_day: f64,
    /// Extra time corrector on `b` minimising the difference's standard deviation, minutes.
    pub best_lag_min: f64,
    /// Standard deviation of the difference at the best lag, metres.
    pub std_at_best_lag_m: f64,
    /// Largest step found in the difference series.
    pub step: Option<Step>,
    /// The moving window with the steepest drift (None: the overlap is shorter than a window).
    pub window_drift: Option<WindowDrift>,
    /// Why the pair is flagged (empty: not flagged).
    pub findings: Vec<CompareFinding>,
}

/// Why a pair is flagged, as numbers; `io::text` words it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CompareFinding {
    /// |mean| exceeds its limit: a datum error.
    Mean {
        /// The mean difference, metres.
        mean_m: f64,
        /// The limit, metres.
        limit_m: f64,
    },
    /// |drift| exceeds its limit over at least three days: a drifting or settling sensor.
    Drift {
        /// The drift, metres per day.
        drift_m_per_day: f64,
        /// The limit, metres per day.
        limit_m_per_day: f64,
    },
    /// |best lag| exceeds its limit: a clock, time-zone or time-corrector error.
    Lag {
        /// The best lag, minutes.
        best_lag_min: f64,
        /// Standard deviation at that lag, metres.
        std_at_best_lag_m: f64,
        /// Standard deviation without it, metres.
        std_m: f64,
    },
    /// A step in the difference: a gauge moved or was re-levelled.
    Step(Step),
    /// A drift within a moving window exceeds its limit (and five standard errors): a slowly
    /// drifting or settling sensor that one rate over the whole overlap averages away.
    WindowDrift {
        /// The window and its rate.
        drift: WindowDrift,
        /// The limit, metres per day.
        limit_m_per_day: f64,
    },
}

/// The steepest drift of `d` (at increasing `t_s`) over windows of `window_days`, started every
/// eighth of a window from the first time; a window is used when its differences span at least
/// 90 % of it. Slopes are least squares through the hourly means of the differences, and the
/// standard error is the slope's from their scatter. None when no window is complete.
pub fn window_drift(t_s: &[f64], d: &[f64], window_days: f64) -> Option<WindowDrift> {
    let w_s = window_days * 86400.0;
    if t_s.len() < 3 || w_s <= 0.0 {
        return None;
    }
    let (t0, t_end) = (t_s[0], t_s[t_s.len() - 1]);
    let mut best: Option<WindowDrift> = None;
    let mut start = t0;
    while start + w_s <= t_end + 1e-6 {
        let a = t_s.partition_point(|&x| x < start);
        let b = t_s.partition_point(|&x| x < start + w_s);
        let (tw, dw) = (&t_s[a..b], &d[a..b]);
        if tw.len() >= 3 && tw[tw.len() - 1] - tw[0] >= 0.9 * w_s {
            // Hourly means: their scatter about the line gives the slope's standard error with
            // what is correlated within an hour (noise, seiche) averaged and what is correlated
            // over hours (tidal misfit, weather) kept.
            let mut bins: Vec<(f64, f64, f64)> = Vec::new(); // (Σt, Σd, count)
            let mut hour = f64::NEG_INFINITY;
            for (&t, &v) in tw.iter().zip(dw) {
                let hh = ((t - start) / 3600.0).floor();
                if hh != hour {
                    bins.push((0.0, 0.0, 0.0));
                    hour = hh;
                }
                let bin = bins.last_mut().expect("pushed");
                bin.0 += t;
                bin.1 += v;
                bin.2 += 1.0;
            }
            let pts: Vec<(f64, f64)> = bins.iter().map(|b| (b.0 / b.2, b.1 / b.2)).collect();
            let n = pts.len() as f64;
            if n < 3.0 {
                start += w_s / 8.0;
                continue;
            }
            let tbar = pts.iter().map(|p| p.0).sum::<f64>() / n;
            let dbar = pts.iter().map(|p| p.1).sum::<f64>() / n;
            let (mut sxy, mut sxx) = (0.0, 0.0);
            for &(t, v) in &pts {
                let x = (t - tbar) / 86400.0;
                sxy += x * (v - dbar);
                sxx += x * x;
            }
            let rate = sxy / sxx;
            let rss: f64 = pts
                .iter()
                .map(|&(t, v)| {
                    let r = v - dbar - rate * (t - tbar) / 86400.0;
                    r * r
                })
                .sum();
            let u = (rss / (n - 2.0).max(1.0) / sxx).sqrt();
            if best.is_none_or(|b| rate.abs() > b.rate_m_per_day.abs()) {
                best = Some(WindowDrift {
                    from_s: start,
                    until_s: start + w_s,
                    rate_m_per_day: rate,
                    u_rate_m_per_day: u,
                });
            }
        }
        start += w_s / 8.0;
    }
    best
}

fn eval(
    p: &Prediction,
    gauges: &[Gauge],
    interp: &dyn TimeInterpolation,
    t_s: f64,
    lag_min: f64,
    st: &mut Vec<FeedState>,
) -> Option<f64> {
    p.zone
        .tide_at(gauges, interp, t_s - lag_min * 60.0, st)
        .ok()
}

fn mean_std(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1.0).max(1.0);
    (mean, var.sqrt())
}

/// Compares `a` and `b` at `times_s` (typically the observed gauge's sample times). Times where
/// either has no tide are skipped. Returns None when fewer than 3 times remain.
pub fn compare(
    a: &Prediction,
    b: &Prediction,
    gauges: &[Gauge],
    interp: &dyn TimeInterpolation,
    times_s: &[f64],
    s: &CompareSettings,
) -> Option<Comparison> {
    let mut st = Vec::new();
    let mut t_ok = Vec::new();
    let mut diff = Vec::new();
    let mut a_vals = Vec::new();
    for &t in times_s {
        if let (Some(va), Some(vb)) = (
            eval(a, gauges, interp, t, 0.0, &mut st),
            eval(b, gauges, interp, t, 0.0, &mut st),
        ) {
            t_ok.push(t);
            diff.push(va - vb);
            a_vals.push(va);
        }
    }
    if diff.len() < 3 {
        return None;
    }
    let (mean_m, std_m) = mean_std(&diff);
    let (mut max_abs_m, mut max_abs_at_s) = (0.0, t_ok[0]);
    for (&t, &d) in t_ok.iter().zip(&diff) {
        if d.abs() > max_abs_m {
            max_abs_m = d.abs();
            max_abs_at_s = t;
        }
    }
    // Drift: slope of d against time in days, about the mean time.
    let tbar = t_ok.iter().sum::<f64>() / t_ok.len() as f64;
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for (&t, &d) in t_ok.iter().zip(&diff) {
        let x = (t - tbar) / 86400.0;
        sxy += x * (d - mean_m);
        sxx += x * x;
    }
    let drift_m_per_day = if sxx > 0.0 { sxy / sxx } else { 0.0 };

    // Lag search on at most ~20 000 of the times.
    let stride = (t_ok.len() / 20_000).max(1);
    let sub: Vec<usize> = (0..t_ok.len()).step_by(stride).collect();
    let n_lag = s.lag_search_min.floor() as i64;
    let mut stds: Vec<(f64, f64)> = Vec::new();
    let mut d = Vec::with_capacity(sub.len());
    for lag in -n_lag..=n_lag {
        d.clear();
        for &k in &sub {
            if let Some(vb) = eval(b, gauges, interp, t_ok[k], lag as f64, &mut st) {
                d.push(a_vals[k] - vb);
            }
        }
        // Require most of the times so that a lag does not win by dropping difficult ones.
        if d.len() * 10 >= sub.len() * 9 && d.len() >= 3 {
            stds.push((lag as f64, mean_std(&d).1));
        }
    }
    let (best_lag_min, std_at_best_lag_m) = match stds
        .iter()
        .enumerate()
        .min_by(|x, y| x.1 .1.total_cmp(&y.1 .1))
    {
        None => (0.0, std_m),
        Some((k, &(lag, sd))) => {
            if k > 0
                && k + 1 < stds.len()
                && stds[k - 1].0 == lag - 1.0
                && stds[k + 1].0 == lag + 1.0
            {
                // Parabola through the three: variance is near-quadratic in the lag.
                let (y0, y1, y2) = (stds[k - 1].1.powi(2), sd.powi(2), stds[k + 1].1.powi(2));
                let den = y0 - 2.0 * y1 + y2;
                let off = if den > 0.0 {
                    0.5 * (y0 - y2) / den
                } else {
                    0.0
                };
                let refined = lag + off.clamp(-0.5, 0.5);
                // The standard deviation at the refined lag itself.
                d.clear();
                for &k in &sub {
                    if let Some(vb) = eval(b, gauges, interp, t_ok[k], refined, &mut st) {
                        d.push(a_vals[k] - vb);
                    }
                }
                let sd_refined = if d.len() >= 3 { mean_std(&d).1 } else { sd };
                (refined, sd_refined.min(sd))
            } else {
                (lag, sd)
            }
        }
    };

    // Step in the difference series.
    let idx: Vec<usize> = (0..t_ok.len()).collect();
    let mut steps: Vec<f64> = t_ok.windows(2).map(|w| w[1] - w[0]).collect();
    let nominal = if steps.is_empty() {
        0.0
    } else {
        let mid = steps.len() / 2;
        *steps.select_nth_unstable_by(mid, f64::total_cmp).1
    };
    let j = step_statistic(&t_ok, &diff, &idx, nominal, s.shift_window_min);
    let reach = super::qc::step_window_samples(s.shift_window_min, nominal);
    let step = super::qc::find_steps(&j, reach, s.shift_k, s.shift_min_m)
        .into_iter()
        .max_by(|x, y| j[x.junction].abs().total_cmp(&j[y.junction].abs()))
        .map(|f| Step {
            at_s: t_ok[f.junction],
            size_m: j[f.junction],
        });

    let mut findings = Vec::new();
    if mean_m.abs() > s.max_mean_m {
        findings.push(CompareFinding::Mean {
            mean_m,
            limit_m: s.max_mean_m,
        });
    }
    // A drift over less than three days is mostly tidal misfit: reported, not flagged.
    let span_days = (t_ok[t_ok.len() - 1] - t_ok[0]) / 86400.0;
    if drift_m_per_day.abs() > s.max_drift_m_per_day && span_days >= 3.0 {
        findings.push(CompareFinding::Drift {
            drift_m_per_day,
            limit_m_per_day: s.max_drift_m_per_day,
        });
    }
    if best_lag_min.abs() > s.max_lag_min {
        findings.push(CompareFinding::Lag {
            best_lag_min,
            std_at_best_lag_m,
            std_m,
        });
    }
    if let Some(st) = step {
        findings.push(CompareFinding::Step(st));
    }
    let wd = window_drift(&t_ok, &diff, s.drift_window_days);
    if let Some(w) = wd {
        if w.rate_m_per_day.abs() > s.max_window_drift_m_per_day
            && w.rate_m_per_day.abs() > 5.0 * w.u_rate_m_per_day
        {
            findings.push(CompareFinding::WindowDrift {
                drift: w,
                limit_m_per_day: s.max_window_drift_m_per_day,
            });
        }
    }
    Some(Comparison {
        a: a.label.clone(),
        b: b.label.clone(),
        times_s: t_ok,
        diff_m: diff,
        mean_m,
        std_m,
        max_abs_m,
        max_abs_at_s,
        drift_m_per_day,
        best_lag_min,
        std_at_best_lag_m,
        step,
        window_drift: wd,
        findings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A gauge of a test pair: its samples, a 30-min maximum gap and its mean level.
    fn pair_gauge(id: &str, t: Vec<f64>, h: Vec<f64>, m: f64) -> Gauge {
        Gauge {
            id: id.into(),
            series: LevelSeries {
                times_s: t,
                heights_m: h,
                max_gap_s: 1800.0,
                ..Default::default()
            },
            mean_level_above_datum_m: m,
        }
    }
    use crate::compute::series::{LevelSeries, Linear};
    use crate::compute::zoning::{GaugeFeed, MeanLevelForm};
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    fn tide(t_s: f64) -> f64 {
        let h = t_s / 3600.0;
        1.4 * (28.984_104_2 * h - 30.0).to_radians().cos()
            + 0.45 * (30.0 * h - 60.0).to_radians().cos()
            + 0.12 * (15.041_068_6 * h - 190.0).to_radians().cos()
    }

    /// Two gauges 6-minutely over 10 days: `b` sees the tide 25 min later, 1.1 × the range, with
    /// mean levels 2.6 and 2.9 m; both with 1 cm noise. `fault` alters b's record.
    fn gauges(fault: impl Fn(f64, f64) -> (f64, f64)) -> Vec<Gauge> {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let noise = Normal::new(0.0, 0.01).unwrap();
        let t: Vec<f64> = (0..2400).map(|i| 1.78e9 + i as f64 * 360.0).collect();
        let ha: Vec<f64> = t
            .iter()
            .map(|&t| 2.6 + tide(t) + noise.sample(&mut rng))
            .collect();
        let (tb, hb): (Vec<f64>, Vec<f64>) = t
            .iter()
            .map(|&t| {
                let h = 2.9 + 1.1 * tide(t - 25.0 * 60.0) + noise.sample(&mut rng);
                fault(t, h)
            })
            .unzip();
        vec![pair_gauge("a", t, ha, 2.6), pair_gauge("b", tb, hb, 2.9)]
    }

    fn preds() -> (Prediction, Prediction) {
        let observed = Prediction {
            label: "b observed".into(),
            zone: Zone {
                id: "b".into(),
                feeds: vec![GaugeFeed {
                    gauge: 1,
                    weight: 1.0,
                    time_corrector_min: 0.0,
                    range_ratio: 1.0,
                }],
                mean_level: MeanLevelForm::Scaled,
            },
        };
        let carried = Prediction {
            label: "a via zone Z".into(),
            zone: Zone {
                id: "Z".into(),
                feeds: vec![GaugeFeed {
                    gauge: 0,
                    weight: 1.0,
                    time_corrector_min: 25.0,
                    range_ratio: 1.1,
                }],
                mean_level: MeanLevelForm::ZoneMean {
                    zone_mean_level_above_datum_m: 2.9,
                },
            },
        };
        (observed, carried)
    }

    fn settings() -> CompareSettings {
        CompareSettings {
            max_mean_m: 0.05,
            max_drift_m_per_day: 0.02,
            max_lag_min: 10.0,
            lag_search_min: 90.0,
            shift_window_min: 180.0,
            shift_k: 8.0,
            shift_min_m: 0.05,
            drift_window_days: CompareSettings::DRIFT_WINDOW_DAYS,
            max_window_drift_m_per_day: CompareSettings::MAX_WINDOW_DRIFT_M_PER_DAY,
        }
    }

    fn run(g: &[Gauge]) -> Comparison {
        let (a, b) = preds();
        let times: Vec<f64> = g[1].series.times_s.clone();
        compare(&a, &b, g, &Linear, &times, &settings()).unwrap()
    }

    #[test]
    fn consistent_gauges_are_not_flagged() {
        let c = run(&gauges(|t, h| (t, h)));
        assert!(c.findings.is_empty(), "{:?}", c.findings);
        assert!(c.mean_m.abs() < 0.005, "{}", c.mean_m);
        // 1 cm noise on b, 1.1 cm on a carried: σ ≈ 1.5 cm plus linear-interpolation error.
        assert!(c.std_m < 0.02, "{}", c.std_m);
        assert!(c.best_lag_min.abs() < 1.0, "{}", c.best_lag_min);
    }

    #[test]
    fn datum_error_shows_in_the_mean() {
        // b's zero mis-levelled by 0.12 m.
        let c = run(&gauges(|t, h| (t, h + 0.12)));
        assert!((c.mean_m - 0.12).abs() < 0.005, "{}", c.mean_m);
        assert_eq!(c.findings.len(), 1, "{:?}", c.findings);
        assert!(matches!(c.findings[0], CompareFinding::Mean { .. }));
    }

    #[test]
    fn timing_error_is_found_as_a_lag() {
        // b's logger clock is 30 min slow: each reading is stamped 30 min early — the record
        // shows the tide 30 min later than true relative to its time stamps.
        let c = run(&gauges(|t, _| {
            let true_t = t + 30.0 * 60.0;
            (t, 2.9 + 1.1 * tide(true_t - 25.0 * 60.0))
        }));
        // b's readings are the tide 30 min later than their stamps: a's carried prediction must
        // be shifted by −30 min to match (b's lag is the extra time corrector on a's feed).
        assert!((c.best_lag_min + 30.0).abs() < 1.0, "{}", c.best_lag_min);
        assert!(
            c.findings
                .iter()
                .any(|f| matches!(f, CompareFinding::Lag { .. })),
            "{:?}",
            c.findings
        );
        assert!(c.std_at_best_lag_m < 0.3 * c.std_m);
    }

    #[test]
    fn step_and_drift_are_found() {
        let t_step = 1.78e9 + 1500.0 * 360.0;
        let c = run(&gauges(|t, h| (t, if t >= t_step { h + 0.10 } else { h })));
        let st = c.step.expect("a step");
        assert_eq!(st.at_s, t_step);
        assert!((st.size_m - 0.10).abs() < 0.02, "{}", st.size_m);
        let c = run(&gauges(|t, h| (t, h + 0.03 * (t - 1.78e9) / 86400.0)));
        assert!(
            (c.drift_m_per_day - 0.03).abs() < 0.003,
            "{}",
            c.drift_m_per_day
        );
        assert!(c
            .findings
            .iter()
            .any(|f| matches!(f, CompareFinding::Drift { .. })));
    }

    /// Two gauges as in [`gauges`] but over `days` with noise `sd_m` and a seed, the second's
    /// record altered by `fault` and with the samples for which `hole` holds left out.
    fn gauge_pair(
        days: f64,
        sd_m: f64,
        seed: u64,
        fault: impl Fn(f64, f64) -> f64,
        hole: impl Fn(f64) -> bool,
    ) -> Vec<Gauge> {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let noise = Normal::new(0.0, sd_m).unwrap();
        let n = (days * 240.0) as usize;
        let t: Vec<f64> = (0..n).map(|i| 1.78e9 + i as f64 * 360.0).collect();
        let ha: Vec<f64> = t
            .iter()
            .map(|&t| 2.6 + tide(t) + noise.sample(&mut rng))
            .collect();
        let (tb, hb): (Vec<f64>, Vec<f64>) = t
            .iter()
            .map(|&t| {
                (
                    t,
                    2.9 + 1.1 * tide(t - 25.0 * 60.0) + noise.sample(&mut rng),
                )
            })
            .filter(|&(t, _)| !hole(t))
            .map(|(t, h)| (t, fault(t, h)))
            .unzip();
        vec![pair_gauge("a", t, ha, 2.6), pair_gauge("b", tb, hb, 2.9)]
    }

    #[test]
    fn slow_drift_is_found_in_moving_windows_at_every_start() {
        // b drifts by 0.1 m over 10 days (0.01 m/day, half the whole-record limit once the
        // drift is diluted by 20 days of record), starting at day 5 plus 0–25 h in 1-h steps,
        // with a 48-min hole in b's record just before the drift starts. Noise 1 and 2 cm.
        for (sd, seed) in [(0.01, 81), (0.02, 82)] {
            for q in 0..26 {
                let t_d = 1.78e9 + 5.0 * 86400.0 + q as f64 * 3600.0;
                let g = gauge_pair(
                    20.0,
                    sd,
                    seed + q,
                    |t, h| h + 0.01 * ((t - t_d) / 86400.0).clamp(0.0, 10.0),
                    |t| t >= t_d - 3600.0 && t < t_d - 720.0,
                );
                let c = run(&g);
                let w = c
                    .findings
                    .iter()
                    .find_map(|f| match f {
                        CompareFinding::WindowDrift { drift, .. } => Some(*drift),
                        _ => None,
                    })
                    .unwrap_or_else(|| panic!("σ {sd}, start {q}: {:?}", c.window_drift));
                // The observed gauge (b) drifts up against the other carried to it.
                assert!(w.rate_m_per_day > 0.0, "{w:?}");
                // Measured 0.0101–0.0126 m/day: the steepest of the windows is biased up by the
                // noise of each window's slope (σ 0.0008 m/day with 2 cm noise).
                assert!(
                    (w.rate_m_per_day.abs() - 0.01).abs() < 0.003,
                    "σ {sd}, start {q}: {w:?}"
                );
                // The window lies within the drift.
                assert!(w.from_s >= t_d - 86400.0 && w.until_s <= t_d + 11.0 * 86400.0);
            }
        }
    }

    #[test]
    fn consistent_gauges_with_holes_show_no_window_drift() {
        // 20 days, noise 1, 2 and 3 cm, a 48-min hole in b every 25 h: the steepest window
        // drift stays below the limit.
        for (sd, seed) in [(0.01, 91), (0.02, 92), (0.03, 93)] {
            let g = gauge_pair(
                20.0,
                sd,
                seed,
                |_, h| h,
                |t| ((t - 1.78e9) % 90_000.0) < 2880.0 && t > 1.78e9 + 3600.0,
            );
            let c = run(&g);
            assert!(c.findings.is_empty(), "σ {sd}: {:?}", c.findings);
            let w = c.window_drift.expect("20 days hold 4-day windows");
            assert!(
                w.rate_m_per_day.abs() < 0.6 * CompareSettings::MAX_WINDOW_DRIFT_M_PER_DAY,
                "σ {sd}: {w:?}"
            );
        }
    }
}
