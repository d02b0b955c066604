//! Uncertainty of the reduced depth by first-order GUM propagation, and the IHO S-44 orders it
//! is judged against.
//!
//! Owns: [`GaugeUncertainty`] and [`ZoneUncertainty`] (the inputs), [`TideBudget`] (the five
//! tide components), the sounding uncertainty model, [`SurveyOrder`] with the built-in S-44
//! Edition 6.1.0 Table 1, the total vertical uncertainty, and the per-sounding verdict on the
//! written values ([`judge_as_written`]).
//!
//! For a zone fed by gauges `i` (weights `w_i`, range ratios `R_i`, time correctors `Δt_i`), with
//! `g_i = h_i(t − Δt_i)` the gauge level at the corrected time and `ġ_i` its rate, the variance of
//! the zone tide is the sum of five components (all inputs independent standard uncertainties):
//!
//! ```text
//! gauge:   Σ (w_i R_i)² u²_gauge,i
//! datum:   Σ  w_i²      u²_datum,i                  (chart datum at the zone, inherited per gauge)
//! range:   Σ (w_i r_i)² u²_R          r_i = g_i − M_i (zone-mean form) or g_i (scaled form)
//! timing:  Σ (w_i R_i ġ_i)² u²_Δt
//! zone:    u²_zone
//! ```
//!
//! For a single gauge this is the discrete-zone formula
//! `u²(tide) = R² u²_gauge + u²_datum + (g − M_g)² u²_R + (R ġ)² u²_Δt + u²_zone`.
//!
//! The rate `ġ` is a central difference of the interpolated record over ±[`RATE_HALF_WINDOW_S`]
//! (a one-sample slope of a noisy 1-min record is mostly noise).
//!
//! # References
//! JCGM 100:2008 (GUM), §5.1 (law of propagation of uncertainty for uncorrelated inputs), §6
//! (expanded uncertainty; k = 1.96 for 95 % of a normal distribution).
//! IHO S-44 Edition 6.1.0 (2022), Table 1: `TVU_max(d) = sqrt(a² + (b·d)²)` at 95 %.

use super::series::TimeInterpolation;
use super::zoning::{FeedState, Gauge, MeanLevelForm, Zone};

/// Coverage factor for a 95 % interval of a one-dimensional normal quantity (GUM §6.3, G.1).
pub const K95: f64 = 1.96;

/// Half-width of the window for the gauge's rate of change, seconds (15 min).
pub const RATE_HALF_WINDOW_S: f64 = 900.0;

/// Standard uncertainties of one gauge.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GaugeUncertainty {
    /// Sensor and time-interpolation standard uncertainty of the level, metres.
    pub u_gauge_m: f64,
    /// Standard uncertainty of chart datum as carried by this gauge (levelling, datum
    /// determination, transfer), metres.
    pub u_datum_m: f64,
}

/// Standard uncertainties of one zone's correctors.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ZoneUncertainty {
    /// Standard uncertainty of the time corrector(s), minutes.
    pub u_time_corrector_min: f64,
    /// Standard uncertainty of the range ratio(s), dimensionless.
    pub u_range_ratio: f64,
    /// Spatial standard uncertainty the zoning does not capture, metres.
    pub u_zone_m: f64,
}

/// Names of the five tide components, in [`TideBudget::variances_m2`] order.
pub const TIDE_COMPONENTS: [&str; 5] = ["gauge", "datum", "range", "timing", "zone"];

/// The tide variance split into its components, m².
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct TideBudget {
    /// Variances in [`TIDE_COMPONENTS`] order, m².
    pub variances_m2: [f64; 5],
}

impl TideBudget {
    /// Combined standard uncertainty of the tide, metres.
    pub fn u_tide_m(&self) -> f64 {
        self.variances_m2.iter().sum::<f64>().sqrt()
    }
    /// Each component as a standard uncertainty, metres.
    pub fn components_m(&self) -> [f64; 5] {
        self.variances_m2.map(f64::sqrt)
    }
}

/// Rate of change of a gauge's level at `t_s`, m/s: central difference over
/// ±[`RATE_HALF_WINDOW_S`], narrowed to the usable record; `fallback` when no window fits.
pub fn robust_rate_m_per_s(
    gauge: &Gauge,
    interp: &dyn TimeInterpolation,
    t_s: f64,
    fallback: f64,
) -> f64 {
    let mut w = RATE_HALF_WINDOW_S;
    while w >= 60.0 {
        if let (Ok(a), Ok(b)) = (
            interp.level_at(&gauge.series, t_s - w),
            interp.level_at(&gauge.series, t_s + w),
        ) {
            return (b.height_m - a.height_m) / (2.0 * w);
        }
        w /= 2.0;
    }
    fallback
}

/// Each gauge's rate of change at its own samples ([`robust_rate_m_per_s`]), as a series that
/// interpolates to the rate at any time: computed once per gauge so the hot loop needs no extra
/// interpolation. Heights of the returned series are rates in m/s.
pub fn rate_series(gauge: &Gauge, interp: &dyn TimeInterpolation) -> super::series::LevelSeries {
    let s = &gauge.series;
    let rates = s
        .times_s
        .iter()
        .enumerate()
        .map(|(i, &t)| {
            let fallback = if s.times_s.len() < 2 {
                0.0
            } else {
                let j = i.min(s.times_s.len() - 2);
                (s.heights_m[j + 1] - s.heights_m[j]) / (s.times_s[j + 1] - s.times_s[j])
            };
            robust_rate_m_per_s(gauge, interp, t, fallback)
        })
        .collect();
    super::series::LevelSeries {
        times_s: s.times_s.clone(),
        heights_m: rates,
        max_gap_s: s.max_gap_s,
        ..Default::default()
    }
}

/// Tide uncertainty budget of `zone` at UTC `t_s`, given the feed states its tide used and each
/// gauge's [`rate_series`].
///
/// # Units
/// Inputs as in [`GaugeUncertainty`] and [`ZoneUncertainty`]; variances in m².
pub fn tide_budget(
    zone: &Zone,
    gauges: &[Gauge],
    gauge_u: &[GaugeUncertainty],
    zone_u: &ZoneUncertainty,
    rates: &[super::series::LevelSeries],
    t_s: f64,
    states: &[FeedState],
) -> TideBudget {
    let mut v = [0.0; 5];
    let u_dt_s = zone_u.u_time_corrector_min * 60.0;
    for (feed, st) in zone.feeds.iter().zip(states) {
        let g = &gauges[feed.gauge];
        let gu = &gauge_u[feed.gauge];
        let wr = feed.weight * feed.range_ratio;
        let r = match zone.mean_level {
            MeanLevelForm::ZoneMean { .. } => st.level.height_m - g.mean_level_above_datum_m,
            MeanLevelForm::Scaled => st.level.height_m,
        };
        let shifted = t_s - feed.time_corrector_min * 60.0;
        let rs = &rates[feed.gauge];
        let rate = if rs.times_s.len() == g.series.times_s.len() {
            rs.linear_in_bracket(st.level.bracket, shifted)
        } else {
            st.level.rate_m_per_s
        };
        v[0] += (wr * gu.u_gauge_m).powi(2);
        v[1] += (feed.weight * gu.u_datum_m).powi(2);
        v[2] += (feed.weight * r * zone_u.u_range_ratio).powi(2);
        v[3] += (wr * rate * u_dt_s).powi(2);
    }
    v[4] = zone_u.u_zone_m.powi(2);
    TideBudget { variances_m2: v }
}

/// How the sounding's own standard uncertainty is found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SoundingUncertaintyModel {
    /// Depth-independent part `a`, metres (standard).
    pub a_m: f64,
    /// Depth-dependent factor `b` (standard).
    pub b: f64,
}

impl SoundingUncertaintyModel {
    /// `u = sqrt(a² + (b·d)²)`, metres, for observed depth `d` (metres, positive down).
    pub fn u_m(&self, depth_m: f64) -> f64 {
        (self.a_m * self.a_m + (self.b * depth_m).powi(2)).sqrt()
    }
}

/// A survey order's vertical and horizontal limits (95 %).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SurveyOrder {
    /// Name as used on the command line and in reports.
    pub name: String,
    /// Depth-independent part of the allowed TVU, metres (95 %).
    pub a_m: f64,
    /// Depth-dependent factor of the allowed TVU (95 %).
    pub b: f64,
    /// Allowed horizontal uncertainty (95 %), as text (not used in the vertical check).
    pub thu_max95: String,
}

impl SurveyOrder {
    /// Maximum allowable TVU at 95 % for a reduced depth `d` (metres; drying heights use 0).
    ///
    /// # References
    /// IHO S-44 Edition 6.1.0 (2022), Table 1.
    ///
    /// ```
    /// use ebbwise::compute::uncertainty::s44_order;
    /// let o = s44_order("1a").unwrap();
    /// // Worked check: sqrt(0.5² + (0.013 × 10)²) = 0.5166 m.
    /// approx::assert_relative_eq!(o.tvu_max95_m(10.0), 0.516624, epsilon = 1e-6);
    /// ```
    pub fn tvu_max95_m(&self, reduced_depth_m: f64) -> f64 {
        let d = reduced_depth_m.max(0.0);
        (self.a_m * self.a_m + (self.b * d).powi(2)).sqrt()
    }
}

/// IHO S-44 Edition 6.1.0 (2022) Table 1, strictest first: (name, a m, b, THU 95 %).
pub const S44_TABLE1: [(&str, f64, f64, &str); 5] = [
    ("exclusive", 0.15, 0.0075, "1 m"),
    ("special", 0.25, 0.0075, "2 m"),
    ("1a", 0.5, 0.013, "5 m + 5 % of depth"),
    ("1b", 0.5, 0.013, "5 m + 5 % of depth"),
    ("2", 1.0, 0.023, "20 m + 10 % of depth"),
];

/// The built-in S-44 orders, strictest first.
pub fn s44_orders() -> Vec<SurveyOrder> {
    S44_TABLE1
        .iter()
        .map(|(n, a, b, t)| SurveyOrder {
            name: n.to_string(),
            a_m: *a,
            b: *b,
            thu_max95: t.to_string(),
        })
        .collect()
}

/// A built-in S-44 order by name (case-insensitive).
pub fn s44_order(name: &str) -> Option<SurveyOrder> {
    s44_orders()
        .into_iter()
        .find(|o| o.name.eq_ignore_ascii_case(name))
}

/// Total vertical uncertainty: `u_tvu = sqrt(u_sounding² + u_tide²)`, metres (standard).
pub fn u_tvu_m(u_sounding_m: f64, u_tide_m: f64) -> f64 {
    (u_sounding_m * u_sounding_m + u_tide_m * u_tide_m).sqrt()
}

/// Largest `U95 / allowed` ratio [`judge_as_written`] returns; it stands for "the allowed TVU is
/// written as 0 and U95 is not".
pub const MAX_RATIO: f64 = 1000.0;

/// One sounding against one order, judged on U95 TVU and the allowed TVU as the uncertainty
/// columns write them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WrittenVerdict {
    /// U95 as written ≤ allowed as written: the row's `within_order`.
    pub within: bool,
    /// U95 as written / allowed as written (at most [`MAX_RATIO`]; 1 when both are written as
    /// 0), so `ratio ≤ 1` exactly when `within`.
    pub ratio: f64,
}

/// `value` rounded to `decimals` as an integer count of units of the last decimal (the written
/// digits without the point, with their sign): `0.256` at 3 decimals is 256. Rounds half away
/// from zero on the magnitude, the rule of every fixed-decimal column (`io::numfmt::push_fixed`,
/// whose tests hold the two together). `None` for a value that is not finite or too large.
pub fn units_at_decimals(value: f64, decimals: u32) -> Option<i64> {
    const POW10: [f64; 10] = [1.0, 10.0, 100.0, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9];
    if !value.is_finite() || decimals > 9 {
        return None;
    }
    let scaled = value.abs() * POW10[decimals as usize] + 0.5;
    if scaled >= 1.0e18 {
        return None;
    }
    let n = scaled as u64 as i64;
    Some(if value < 0.0 { -n } else { n })
}

/// Judges U95 TVU against the allowed TVU on the two values rounded to `decimals`, the way
/// the fixed-decimal columns write them ([`units_at_decimals`]): a row that reads `0.256,0.256` is within, one that
/// reads `0.257,0.256` is not. Both values in metres (95 %), non-negative.
///
/// ```
/// use ebbwise::compute::uncertainty::judge_as_written;
/// // 0.2564 and 0.2556 both read 0.256 at 3 decimals: within, ratio 1.
/// let v = judge_as_written(0.2564, 0.2556, 3);
/// assert!(v.within);
/// assert_eq!(v.ratio, 1.0);
/// // At 4 decimals they read 0.2564 and 0.2556: not within.
/// assert!(!judge_as_written(0.2564, 0.2556, 4).within);
/// ```
pub fn judge_as_written(u95_tvu_m: f64, allowed_u95_tvu_m: f64, decimals: u32) -> WrittenVerdict {
    match (
        units_at_decimals(u95_tvu_m, decimals),
        units_at_decimals(allowed_u95_tvu_m, decimals),
    ) {
        (Some(u), Some(a)) => WrittenVerdict {
            within: u <= a,
            ratio: match (u, a) {
                (0, 0) => 1.0,
                (_, 0) => MAX_RATIO,
                _ => (u as f64 / a as f64).min(MAX_RATIO),
            },
        },
        // Not finite or beyond 1e9 m: no rounding to speak of.
        _ => {
            let within = u95_tvu_m <= allowed_u95_tvu_m;
            let ratio = u95_tvu_m / allowed_u95_tvu_m;
            WrittenVerdict {
                within,
                ratio: if ratio.is_nan() {
                    MAX_RATIO
                } else {
                    ratio.min(MAX_RATIO)
                },
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::series::{LevelSeries, Linear};
    use crate::compute::zoning::GaugeFeed;
    use approx::assert_relative_eq;

    #[test]
    fn the_verdict_follows_the_written_values() {
        // Rounded by hand to 3 decimals: 0.2564 and 0.2556 read 0.256, 0.2554 reads 0.255.
        assert!(judge_as_written(0.2564, 0.2556, 3).within); // 0.256 ≤ 0.256, though 0.2564 > 0.2556
        assert!(!judge_as_written(0.2556, 0.2554, 3).within); // 0.256 > 0.255
        assert_eq!(judge_as_written(0.2556, 0.2554, 3).ratio, 256.0 / 255.0);
        assert_eq!(judge_as_written(0.198, 0.25, 3).ratio, 198.0 / 250.0);
        // An allowed TVU written as 0 (a custom order with a tiny a): U95 0 is within it, any
        // other U95 is not.
        assert_eq!(
            judge_as_written(0.0001, 0.0002, 3),
            WrittenVerdict {
                within: true,
                ratio: 1.0
            }
        );
        assert_eq!(judge_as_written(0.01, 0.0002, 3).ratio, MAX_RATIO);
        assert!(!judge_as_written(0.01, 0.0002, 3).within);
        // The ratio is ≤ 1 exactly when within, over a sweep across rounding boundaries.
        for i in 0..2000 {
            let u = 0.25 + i as f64 * 1.3e-6;
            let v = judge_as_written(u, 0.2515, 3);
            assert_eq!(v.within, v.ratio <= 1.0, "{u}");
        }
    }

    #[test]
    fn s44_table_values() {
        // IHO S-44 Edition 6.1.0 (2022), Table 1.
        let o = s44_orders();
        let got: Vec<_> = o.iter().map(|o| (o.name.as_str(), o.a_m, o.b)).collect();
        assert_eq!(
            got,
            vec![
                ("exclusive", 0.15, 0.0075),
                ("special", 0.25, 0.0075),
                ("1a", 0.5, 0.013),
                ("1b", 0.5, 0.013),
                ("2", 1.0, 0.023)
            ]
        );
        assert_eq!(o[0].thu_max95, "1 m");
        assert_eq!(o[4].thu_max95, "20 m + 10 % of depth");
        // Worked example: Order 1a at 10 m → sqrt(0.5² + 0.13²) = 0.5166 m.
        assert_relative_eq!(
            s44_order("1A").unwrap().tvu_max95_m(10.0),
            0.5166,
            epsilon = 5e-5
        );
        // Drying heights use d = 0.
        assert_eq!(s44_order("special").unwrap().tvu_max95_m(-1.2), 0.25);
    }

    fn rates(g: &[Gauge]) -> Vec<LevelSeries> {
        g.iter().map(|g| rate_series(g, &Linear)).collect()
    }

    /// A gauge with h(t) = M + A cos(ω t), sampled every minute over a day.
    pub(crate) fn sine_gauge(mean: f64, amp: f64) -> Gauge {
        let omega = 28.984_104_2_f64.to_radians() / 3600.0; // M2, rad/s
        let times: Vec<f64> = (0..=1440).map(|i| i as f64 * 60.0).collect();
        Gauge {
            id: "s".into(),
            series: LevelSeries {
                heights_m: times
                    .iter()
                    .map(|t| mean + amp * (omega * t).cos())
                    .collect(),
                times_s: times,
                max_gap_s: 1800.0,
                ..Default::default()
            },
            mean_level_above_datum_m: mean,
        }
    }

    fn one_feed_zone(dt_min: f64, r: f64, form: MeanLevelForm) -> Zone {
        Zone {
            id: "Z".into(),
            feeds: vec![GaugeFeed {
                gauge: 0,
                weight: 1.0,
                time_corrector_min: dt_min,
                range_ratio: r,
            }],
            mean_level: form,
        }
    }

    /// Each term against its closed form on a hand-worked case.
    ///
    /// Gauge h(t) = 2.5 + 1.5 cos(ωt), ω = M2 = 28.9841042 °/h. Zone: Δt = 0, R = 1.2, zone-mean
    /// form. At t = T/4 (a quarter period, 3.10515 h): g = 2.5 (mid-tide, g − M = 0) and
    /// ġ = −1.5 ω = −1.5 × 0.505868 rad/h = −0.758802 m/h = −0.0126467 m/min.
    /// Inputs: u_gauge 0.02 m, u_datum 0.04 m, u_R 0.03, u_Δt 10 min, u_zone 0.10 m.
    /// * gauge  = R u_gauge = 0.024 m
    /// * datum  = 0.04 m
    /// * range  = |g − M| u_R = 0 m
    /// * timing = R |ġ| u_Δt = 1.2 × 0.0126467 × 10 = 0.151760 m
    ///   (less ~0.4 % because the ±15-min central difference of a cosine is
    ///   sin(ω·15 min)/(ω·15 min) = 0.99600 of the true rate)
    /// * zone   = 0.10 m
    #[test]
    fn each_term_matches_its_closed_form() {
        let g = vec![sine_gauge(2.5, 1.5)];
        let omega_h = 28.984_104_2_f64.to_radians();
        let period_s = 360.0 / 28.984_104_2 * 3600.0;
        let zu = ZoneUncertainty {
            u_time_corrector_min: 10.0,
            u_range_ratio: 0.03,
            u_zone_m: 0.10,
        };
        let gu = [GaugeUncertainty {
            u_gauge_m: 0.02,
            u_datum_m: 0.04,
        }];
        let zone = one_feed_zone(
            0.0,
            1.2,
            MeanLevelForm::ZoneMean {
                zone_mean_level_above_datum_m: 2.6,
            },
        );
        let t = period_s / 4.0;
        let mut st = Vec::new();
        zone.tide_at(&g, &Linear, t, &mut st).unwrap();
        let b = tide_budget(&zone, &g, &gu, &zu, &rates(&g), t, &st);
        let c = b.components_m();
        assert_relative_eq!(c[0], 0.024, epsilon = 1e-12);
        assert_relative_eq!(c[1], 0.04, epsilon = 1e-12);
        assert!(c[2] < 2e-4, "range term at mid-tide {}", c[2]);
        let x = omega_h * 0.25; // ω × 15 min in radians
        let timing = 1.2 * 1.5 * omega_h / 60.0 * 10.0 * x.sin() / x;
        assert_relative_eq!(c[3], timing, max_relative = 2e-3);
        assert_relative_eq!(c[4], 0.10, epsilon = 1e-12);
        // At high water (t = 0 + one period): g − M = 1.5, ġ = 0: range = 1.5 × 0.03 = 0.045 m.
        let t = period_s;
        zone.tide_at(&g, &Linear, t, &mut st).unwrap();
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), t, &st).components_m();
        assert_relative_eq!(c[2], 0.045, max_relative = 1e-3);
        // Scaled form: the range term is driven by g itself: 4.0 × 0.03 = 0.12 m.
        let scaled = one_feed_zone(0.0, 1.2, MeanLevelForm::Scaled);
        scaled.tide_at(&g, &Linear, t, &mut st).unwrap();
        let c = tide_budget(&scaled, &g, &gu, &zu, &rates(&g), t, &st).components_m();
        assert_relative_eq!(c[2], 0.12, max_relative = 1e-3);
    }

    #[test]
    fn timing_dominates_at_mid_tide_and_vanishes_at_high_water() {
        let g = vec![sine_gauge(2.5, 1.5)];
        let period_s = 360.0 / 28.984_104_2 * 3600.0;
        let zu = ZoneUncertainty {
            u_time_corrector_min: 10.0,
            u_range_ratio: 0.03,
            u_zone_m: 0.05,
        };
        let gu = [GaugeUncertainty {
            u_gauge_m: 0.015,
            u_datum_m: 0.03,
        }];
        let zone = one_feed_zone(
            20.0,
            1.1,
            MeanLevelForm::ZoneMean {
                zone_mean_level_above_datum_m: 2.7,
            },
        );
        let mut st = Vec::new();
        // Mid-tide at the gauge's corrected time: t − 20 min = T/4.
        let t_mid = period_s / 4.0 + 1200.0;
        zone.tide_at(&g, &Linear, t_mid, &mut st).unwrap();
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), t_mid, &st).components_m();
        let max = c.iter().cloned().fold(0.0, f64::max);
        assert_eq!(c[3], max, "timing dominates at mid-tide: {c:?}");
        // High water at the corrected time: t − 20 min = T.
        let t_hw = period_s + 1200.0;
        zone.tide_at(&g, &Linear, t_hw, &mut st).unwrap();
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), t_hw, &st).components_m();
        assert!(c[3] < 1e-3, "timing vanishes at high water: {c:?}");
    }

    /// The whole propagation against an independent Monte Carlo of the same model (JCGM 101:2008
    /// propagation of distributions): every input drawn from its normal distribution, the zone
    /// tide evaluated with the analytic gauge curve (not the interpolated record), 200 000 draws.
    /// First-order GUM and Monte Carlo must agree on u_tide within 2 %.
    #[test]
    fn propagation_agrees_with_monte_carlo() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let omega = 28.984_104_2_f64.to_radians() / 3600.0;
        let curves = [(2.5, 1.5), (2.2, 1.1)]; // (mean, amplitude) per gauge
        let g = vec![
            sine_gauge(curves[0].0, curves[0].1),
            sine_gauge(curves[1].0, curves[1].1),
        ];
        let h = |i: usize, t: f64| curves[i].0 + curves[i].1 * (omega * t).cos();
        let gu = [
            GaugeUncertainty {
                u_gauge_m: 0.02,
                u_datum_m: 0.04,
            },
            GaugeUncertainty {
                u_gauge_m: 0.015,
                u_datum_m: 0.05,
            },
        ];
        let zu = ZoneUncertainty {
            u_time_corrector_min: 8.0,
            u_range_ratio: 0.04,
            u_zone_m: 0.06,
        };
        let zones = [
            Zone {
                id: "one".into(),
                feeds: vec![GaugeFeed {
                    gauge: 0,
                    weight: 1.0,
                    time_corrector_min: 12.0,
                    range_ratio: 1.15,
                }],
                mean_level: MeanLevelForm::ZoneMean {
                    zone_mean_level_above_datum_m: 2.6,
                },
            },
            Zone {
                id: "two".into(),
                feeds: vec![
                    GaugeFeed {
                        gauge: 0,
                        weight: 0.6,
                        time_corrector_min: 12.0,
                        range_ratio: 1.15,
                    },
                    GaugeFeed {
                        gauge: 1,
                        weight: 0.4,
                        time_corrector_min: -5.0,
                        range_ratio: 0.9,
                    },
                ],
                mean_level: MeanLevelForm::Scaled,
            },
        ];
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(20_260_614);
        let n01 = Normal::new(0.0, 1.0).unwrap();
        for zone in &zones {
            for t in [3.0 * 3600.0, 7.5 * 3600.0, 10.2 * 3600.0] {
                let mut st = Vec::new();
                zone.tide_at(&g, &Linear, t, &mut st).unwrap();
                let gum = tide_budget(zone, &g, &gu, &zu, &rates(&g), t, &st).u_tide_m();
                let draws = 200_000;
                let (mut sum, mut sum2) = (0.0, 0.0);
                for _ in 0..draws {
                    let mut tide = 0.0;
                    for f in &zone.feeds {
                        let i = f.gauge;
                        let r = f.range_ratio + zu.u_range_ratio * n01.sample(&mut rng);
                        let dt_s = (f.time_corrector_min
                            + zu.u_time_corrector_min * n01.sample(&mut rng))
                            * 60.0;
                        let level = h(i, t - dt_s) + gu[i].u_gauge_m * n01.sample(&mut rng);
                        let datum = gu[i].u_datum_m * n01.sample(&mut rng);
                        tide += f.weight
                            * match zone.mean_level {
                                MeanLevelForm::ZoneMean { .. } => r * (level - curves[i].0),
                                MeanLevelForm::Scaled => r * level,
                            }
                            + f.weight * datum;
                    }
                    tide += zu.u_zone_m * n01.sample(&mut rng);
                    sum += tide;
                    sum2 += tide * tide;
                }
                let mean = sum / draws as f64;
                let mc = (sum2 / draws as f64 - mean * mean).sqrt();
                assert!(
                    ((gum - mc) / mc).abs() < 0.02,
                    "zone {} at {t} s: GUM {gum:.5} m, Monte Carlo {mc:.5} m",
                    zone.id
                );
            }
        }
    }

    #[test]
    fn combined_is_never_below_a_component() {
        let b = TideBudget {
            variances_m2: [0.0004, 0.0016, 0.0, 0.01, 0.0025],
        };
        for c in b.components_m() {
            assert!(b.u_tide_m() >= c);
        }
        assert_relative_eq!(u_tvu_m(0.3, 0.4), 0.5);
        let m = SoundingUncertaintyModel {
            a_m: 0.05,
            b: 0.003,
        };
        assert_relative_eq!(m.u_m(10.0), (0.0025f64 + 0.0009).sqrt());
    }
}
