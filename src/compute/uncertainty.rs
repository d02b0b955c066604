//! Uncertainty of the reduced depth by first-order GUM propagation, and the IHO S-44 orders it
//! is judged against.
//!
//! Owns: [`GaugeUncertainty`] and [`ZoneUncertainty`] (the inputs), [`TideBudget`] (the five
//! tide components), the sounding uncertainty model, [`SurveyOrder`] with the built-in S-44
//! Edition 6.1.0 Table 1, the total vertical uncertainty, and the per-sounding verdict on the
//! written values ([`judge_as_written`]).
//!
//! For a zone fed by gauges `i` (weights `w_i`, range ratios `R_i`, time correctors `Δt_i`), with
//! `g_i = h_i(t − Δt_i)` the gauge level at the corrected time, `ġ_i` its rate and `g̈_i` its
//! curvature, the variance of the zone tide is the sum of five components. Gauge and datum
//! inputs of different gauges are independent; the zone's range-ratio error and time-corrector
//! error are each one error common to every feed (correlation 1), so their sensitivities are
//! summed before squaring:
//!
//! ```text
//! gauge:   Σ (w_i R_i)² (u²_gauge,i + e²_i)    e_i: the interpolation error (interpolation_error_m)
//! datum:   u²_datum,z (zone-mean form, the zone's own), else Σ c_i² u²_datum,i
//!          c_i = w_i (zone-mean form, chart datum carried from the gauges) or w_i R_i (scaled)
//! range:   (Σ w_i r_i)² u²_R          r_i = g_i − M_i (zone-mean form) or g_i (scaled form)
//! timing:  (Σ w_i R_i ġ_i)² u²_Δt + ½ (Σ w_i R_i g̈_i)² u⁴_Δt
//! zone:    u²_zone
//! ```
//!
//! The second timing term is the second-order term of the time corrector (GUM §5.1.2), which
//! keeps the timing term from vanishing at high and low water.
//!
//! The rate and the curvature are differences of the interpolated record over ±[`RATE_HALF_WINDOW_S`]
//! and ±[`CURVATURE_HALF_WINDOW_S`] inside each sample's unbroken segment ([`rate_series`]).
//!
//! # References
//! JCGM 100:2008 (GUM), §5.1 (law of propagation of uncertainty for uncorrelated inputs), §5.1.2
//! (higher-order terms), §5.2 (correlated inputs), §6
//! (expanded uncertainty; k = 1.96 for 95 % of a normal distribution).
//! IHO S-44 Edition 6.1.0 (2022), Table 1: `TVU_max(d) = sqrt(a² + (b·d)²)` at 95 %.

use super::series::TimeInterpolation;
use super::zoning::{FeedState, Gauge, MeanLevelForm, Zone};

/// Largest standard uncertainty of a height input accepted, metres (`u_gauge_m`, `u_datum_m`,
/// `u_zone_m`, `sounding_a_m` and their defaults). S-44's loosest order (Order 2) allows
/// a = 1.0 m at 95 %, about 0.5 m standard for the whole vertical budget: one component of
/// more than 1 m standard fails every order at every depth and is a slip of units (centimetres
/// or millimetres written as metres). Common practice, with S-44 Edition 6.1.0 Table 1.
pub const U_HEIGHT_REFUSED_ABOVE_M: f64 = 1.0;

/// Largest standard uncertainty of a time corrector accepted, minutes. Time correctors are
/// themselves refused beyond ±360 min and warned beyond ±120 min; an uncertainty above an hour
/// is a slip of units (seconds written as minutes). Common practice.
pub const U_TIME_CORRECTOR_REFUSED_ABOVE_MIN: f64 = 60.0;

/// Largest standard uncertainty of a range ratio accepted (dimensionless). Range ratios lie in
/// 0.2 to 5; an uncertainty above 0.5 is a percentage written as a ratio (3 for 0.03). Common
/// practice.
pub const U_RANGE_RATIO_REFUSED_ABOVE: f64 = 0.5;

/// Largest depth-proportional standard uncertainty `b` of the sounding model accepted
/// (dimensionless): 5 % of the depth, standard, is more than four times S-44 Order 2's
/// b = 0.023 at 95 %; a larger value is a percentage written as a fraction. Common practice,
/// with S-44 Edition 6.1.0 Table 1.
pub const U_SOUNDING_B_REFUSED_ABOVE: f64 = 0.05;

/// Largest `a` (metres, 95 %) and `b` (95 %) of a custom survey order accepted: twice S-44's
/// loosest order (Order 2: a = 1.0 m, b = 0.023). A looser order judges nothing, and such values
/// are slips of units (centimetres for metres, percent for fractions). Common practice, with
/// S-44 Edition 6.1.0 Table 1.
pub const CUSTOM_ORDER_REFUSED_ABOVE: (f64, f64) = (2.0, 0.05);

/// Coverage factor for a 95 % interval of a one-dimensional normal quantity (GUM §6.3, G.1).
pub const K95: f64 = 1.96;

/// Half-width of the window for the gauge's rate of change, seconds (15 min).
pub const RATE_HALF_WINDOW_S: f64 = 900.0;

/// Standard uncertainties of one gauge.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GaugeUncertainty {
    /// Standard uncertainty of the level from the sensor (and anything else that does not
    /// change with time), metres. The interpolation error is added from the record
    /// ([`interpolation_error_m`]).
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
    /// Standard uncertainty of chart datum at the zone, metres: of the zone's mean level above
    /// chart datum `M_z` in the zone-mean form. `None`: chart datum at the zone is carried from
    /// its gauges (each gauge's `u_datum_m`, coefficient `w_i`). Not used in the scaled form.
    pub u_datum_m: Option<f64>,
    /// The standard uncertainty added when the tide is taken from some of the zone's feeds with
    /// their weights renormalised because another has no level, metres: the largest, over the
    /// zone's feeds, of the RMS of the full blend minus the blend without that feed over the
    /// records, where both exist. 0 when renormalisation is off or the zone has one feed.
    pub u_renormalised_m: f64,
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

/// Each gauge's rate of change and curvature at its own samples, computed once per gauge so the
/// hot loop needs no extra interpolation ([`rate_series`]). Both are interpolated linearly
/// between the two samples that bracket an instant ([`GaugeSlopes::at`]).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct GaugeSlopes {
    /// The gauge's sample times, UTC seconds (the same as its series').
    pub times_s: Vec<f64>,
    /// Rate of change of the level at each sample, m/s.
    pub rate_m_per_s: Vec<f64>,
    /// Second derivative of the level at each sample, m/s².
    pub curvature_m_per_s2: Vec<f64>,
    /// Fourth derivative of the level at each sample, m/s⁴: the divided second difference of
    /// the curvature at neighbouring samples of the segment (used only by the spline's interior
    /// interpolation error, [`interpolation_error_m`]).
    pub fourth_m_per_s4: Vec<f64>,
    /// First and last sample index of the unbridged segment around each sample.
    pub segment: Vec<(usize, usize)>,
    /// Fourth derivative at the first and at the last sample of each sample's segment, m/s⁴,
    /// from the curvatures of the three samples nearest each end whose windows were centred on
    /// them (used by the spline's end term of [`interpolation_error_m`]).
    pub segment_end_fourth_m_per_s4: Vec<(f64, f64)>,
}

impl GaugeSlopes {
    /// Rate (m/s) and curvature (m/s²) at `t_s`, between samples `i` and `i + 1` (the bracket
    /// the level was found in).
    pub fn at(&self, i: usize, t_s: f64) -> (f64, f64) {
        let n = self.times_s.len();
        if n < 2 {
            return (
                self.rate_m_per_s.first().copied().unwrap_or(0.0),
                self.curvature_m_per_s2.first().copied().unwrap_or(0.0),
            );
        }
        let i = i.min(n - 2);
        let (t0, t1) = (self.times_s[i], self.times_s[i + 1]);
        let f = ((t_s - t0) / (t1 - t0)).clamp(0.0, 1.0);
        let lerp = |v: &[f64]| v[i] + (v[i + 1] - v[i]) * f;
        (lerp(&self.rate_m_per_s), lerp(&self.curvature_m_per_s2))
    }
}

/// Half-width of the window for the gauge's curvature, seconds (30 min).
pub const CURVATURE_HALF_WINDOW_S: f64 = 1800.0;

/// `(first, last)` sample time of the unbroken segment around each sample: the run of samples
/// joined by intervals that interpolation may bridge ([`LevelSeries::unbridged`]).
fn segment_spans(s: &super::series::LevelSeries) -> Vec<(usize, usize)> {
    let n = s.times_s.len();
    let broken = s.unbridged();
    let mut spans = vec![(0, 0); n];
    let mut a = 0;
    for k in 0..n {
        if k + 1 == n || broken[k] {
            for span in &mut spans[a..=k] {
                *span = (a, k);
            }
            a = k + 1;
        }
    }
    spans
}

/// Each gauge's rate of change and curvature at its own samples, from the interpolated record
/// and never across a break (a gap longer than the maximum gap, or a sample set aside): every
/// window lies inside the sample's unbroken segment.
///
/// * Rate: central difference over ±[`RATE_HALF_WINDOW_S`] (a one-sample slope of a noisy 1-min
///   record is mostly noise). Where the segment ends within the half-window on one side, the
///   one-sided difference over the half-window on the other side; where it ends on both sides,
///   the half-window is halved (down to 60 s); then the slope to the neighbouring sample of the
///   segment, and 0 for a sample alone in its segment.
/// * Curvature: second difference over ±[`CURVATURE_HALF_WINDOW_S`],
///   `(h(t + W) − 2 h(t) + h(t − W)) / W²`, centred on the sample, or on the nearest instant of
///   the segment where the window fits; `W` is at least the sample's longer interval, and is
///   halved (down to 60 s) when the segment is shorter than `2W`; then the divided second
///   difference of three neighbouring samples, and 0 for a segment of fewer than three samples.
/// * Fourth derivative, segments and the curvature at each segment's ends, for
///   [`interpolation_error_m`] (see [`GaugeSlopes`]).
pub fn rate_series(gauge: &Gauge, interp: &dyn TimeInterpolation) -> GaugeSlopes {
    let s = &gauge.series;
    let n = s.times_s.len();
    let spans = segment_spans(s);
    let level = |t: f64| interp.level_at(s, t).map(|l| l.height_m).ok();
    let mut rate = Vec::with_capacity(n);
    let mut curv = Vec::with_capacity(n);
    // Whether a sample's curvature window was centred on it (not moved inside the segment).
    let mut centred = vec![false; n];
    for (k, &(ia, ib)) in spans.iter().enumerate() {
        let (a, b) = (s.times_s[ia], s.times_s[ib]);
        let t = s.times_s[k];
        let h = s.heights_m[k];
        // Rate.
        let mut r = None;
        let mut w = RATE_HALF_WINDOW_S;
        while r.is_none() && w >= 60.0 {
            r = match (t - w >= a, t + w <= b) {
                (true, true) => level(t - w)
                    .zip(level(t + w))
                    .map(|(lo, hi)| (hi - lo) / (2.0 * w)),
                (true, false) => level(t - w).map(|lo| (h - lo) / w),
                (false, true) => level(t + w).map(|hi| (hi - h) / w),
                (false, false) => None,
            };
            w /= 2.0;
        }
        let neighbour =
            |j: usize, m: usize| (s.heights_m[m] - s.heights_m[j]) / (s.times_s[m] - s.times_s[j]);
        rate.push(r.unwrap_or(if k > ia {
            neighbour(k - 1, k)
        } else if k < ib {
            neighbour(k, k + 1)
        } else {
            0.0
        }));
        // Curvature. The window is never narrower than the samples' spacing: the second
        // difference of a linear interpolant over less than one step (midpoints of chords) is
        // not the curve's (twice it, for ±half a step).
        let step = match (k > ia, k < ib) {
            (true, true) => (t - s.times_s[k - 1]).max(s.times_s[k + 1] - t),
            (true, false) => t - s.times_s[k - 1],
            (false, true) => s.times_s[k + 1] - t,
            (false, false) => 0.0,
        };
        let mut c = None;
        let mut w = CURVATURE_HALF_WINDOW_S.max(step);
        while c.is_none() && w >= 60.0 {
            if b - a >= 2.0 * w {
                let m = t.clamp(a + w, b - w);
                centred[k] = m == t;
                c = match (level(m - w), level(m), level(m + w)) {
                    (Some(lo), Some(mid), Some(hi)) => Some((hi - 2.0 * mid + lo) / (w * w)),
                    _ => None,
                };
            }
            w /= 2.0;
        }
        curv.push(c.unwrap_or_else(|| {
            if ib - ia < 2 {
                return 0.0;
            }
            let j = k.clamp(ia + 1, ib - 1);
            2.0 * (neighbour(j, j + 1) - neighbour(j - 1, j))
                / (s.times_s[j + 1] - s.times_s[j - 1])
        }));
    }
    // Fourth derivative: the divided second difference of the curvature, inside the segment.
    let fourth: Vec<f64> = spans
        .iter()
        .enumerate()
        .map(|(k, &(ia, ib))| {
            if ib - ia < 2 {
                return 0.0;
            }
            let j = k.clamp(ia + 1, ib - 1);
            let t = &s.times_s;
            let d = |p: usize, q: usize| (curv[q] - curv[p]) / (t[q] - t[p]);
            2.0 * (d(j, j + 1) - d(j - 1, j)) / (t[j + 1] - t[j - 1])
        })
        .collect();
    // Fourth derivative at each end of each segment: the second derivative of the parabola
    // through the curvatures of the three samples nearest that end whose windows were centred on
    // them (the curvature of a sample whose window had to move inside is the curvature there,
    // not at the sample).
    let mut ends = vec![(0.0, 0.0); n];
    let mut a = 0;
    while a < n {
        let b = spans[a].1;
        let inner: Vec<usize> = (a..=b).filter(|&k| centred[k]).collect();
        let t = &s.times_s;
        let bent = |p: usize, q: usize, r: usize| {
            2.0 * (curv[p] / ((t[p] - t[q]) * (t[p] - t[r]))
                + curv[q] / ((t[q] - t[p]) * (t[q] - t[r]))
                + curv[r] / ((t[r] - t[p]) * (t[r] - t[q])))
        };
        let e = match inner.as_slice() {
            [p, q, r, .., x, y, z] => (bent(*p, *q, *r), bent(*x, *y, *z)),
            _ => (fourth[a], fourth[b]),
        };
        ends[a..=b].fill(e);
        a = b + 1;
    }
    GaugeSlopes {
        times_s: s.times_s.clone(),
        rate_m_per_s: rate,
        curvature_m_per_s2: curv,
        fourth_m_per_s4: fourth,
        segment: spans,
        segment_end_fourth_m_per_s4: ends,
    }
}

/// Where the datum component of a zone's budget comes from ([`zone_datum_u`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DatumSource {
    /// Zone-mean form with the zone's own `u_datum_m`: the uncertainty of `M_z`, chart datum at
    /// the zone. The gauges' zero errors cancel in `g_i − M_i`.
    Zone,
    /// Zone-mean form without the zone's own value: chart datum at the zone as carried from its
    /// gauges, `√Σ (w_i u_datum,i)²` (each gauge's datum independent).
    Gauges,
    /// Scaled form: the range ratio scales each gauge's level above chart datum, zero error
    /// included, `√Σ (w_i R_i u_datum,i)²`.
    GaugesScaled,
}

impl DatumSource {
    /// The name written in reports: `zone`, `gauges`, `gauges_scaled`.
    pub fn as_str(self) -> &'static str {
        match self {
            DatumSource::Zone => "zone",
            DatumSource::Gauges => "gauges",
            DatumSource::GaugesScaled => "gauges_scaled",
        }
    }
}

/// The datum component of `zone`'s tide budget as a standard uncertainty, metres, and where it
/// comes from. It does not change with time.
///
/// * Zone-mean form, `M_z + Σ w_i R_i (g_i − M_i)`: a gauge's zero error shifts `g_i` and `M_i`
///   (the mean of the gauge's own levels, read through the same zero) alike and cancels; what is
///   left is chart datum at the zone, the error of `M_z`: the zone's `u_datum_m` when given,
///   else chart datum at the zone as carried from its gauges, `√Σ (w_i u_datum,i)²`.
/// * Scaled form, `Σ w_i R_i g_i`: `√Σ (w_i R_i u_datum,i)²`; a zone's own value is not used.
pub fn zone_datum_u(
    zone: &Zone,
    gauge_u: &[GaugeUncertainty],
    zone_u: &ZoneUncertainty,
) -> (f64, DatumSource) {
    let carried = |scaled: bool| {
        zone.feeds
            .iter()
            .map(|f| {
                let c = if scaled {
                    f.weight * f.range_ratio
                } else {
                    f.weight
                };
                (c * gauge_u[f.gauge].u_datum_m).powi(2)
            })
            .sum::<f64>()
            .sqrt()
    };
    match (zone.mean_level, zone_u.u_datum_m) {
        (MeanLevelForm::ZoneMean { .. }, Some(u)) => (u, DatumSource::Zone),
        (MeanLevelForm::ZoneMean { .. }, None) => (carried(false), DatumSource::Gauges),
        (MeanLevelForm::Scaled, _) => (carried(true), DatumSource::GaugesScaled),
    }
}

/// Per-interval decay of a spline's end error, `−(2 − √3)`: the root inside the unit circle of
/// `λ² + 4λ + 1 = 0`, the homogeneous spline equations on regular spacing (textbook).
pub const SPLINE_END_DECAY: f64 = -0.267_949_192_431_122_7;

/// Estimated error of the interpolated level at `t_s` in the bracket `i` (samples `i`, `i + 1`),
/// interpolated minus true, metres: zero at the samples.
///
/// With `Δt` the bracket's length, `f` the fraction of it at `t_s`, `g̈` and `g⁗` the record's
/// curvature and fourth derivative ([`rate_series`]) at `t_s`:
/// * linear interpolation: `½ g̈ Δt² f (1 − f)` (the Taylor remainder of linear
///   interpolation; at most `|g̈| Δt² / 8`, at mid-bracket);
/// * the not-a-knot cubic spline ([`crate::compute::spline`]): the interior term
///   `−(Δt⁴ / 24) g⁗ f² (1 − f)²` plus, from each end of the unbroken segment (fourth
///   derivative `g⁗_e` there, the bracket `j` intervals from it, `f` measured from that end's
///   side), `(Δt⁴ g⁗_e / (6 (1 − λ)²)) f (1 − f) λʲ ((2 − f) + λ (1 + f))`,
///   `λ` = [`SPLINE_END_DECAY`]: the error of the end condition carried into the segment.
///
/// The derivation is in `docs/uncertainty.md` ("Interpolation error").
pub fn interpolation_error_m(
    series: &super::series::LevelSeries,
    slopes: &GaugeSlopes,
    i: usize,
    t_s: f64,
) -> f64 {
    let n = series.times_s.len();
    if n < 2 || slopes.times_s.len() != n || i + 1 >= n {
        return 0.0;
    }
    let (t0, t1) = (series.times_s[i], series.times_s[i + 1]);
    let h = t1 - t0;
    let f = (t_s - t0) / h;
    if !(f > 0.0 && f < 1.0) {
        return 0.0; // at a sample (or outside the bracket): nothing is interpolated
    }
    let (ia, ib) = slopes.segment[i];
    if i >= ib {
        return 0.0; // an interval that is never interpolated
    }
    let curvature = slopes.at(i, t_s).1;
    if series.spline_m_per_s2.len() != n {
        return 0.5 * curvature * h * h * f * (1.0 - f);
    }
    let q = &slopes.fourth_m_per_s4;
    let fourth = q[i] + (q[i + 1] - q[i]) * f;
    let interior = -fourth * h.powi(4) / 24.0 * (f * (1.0 - f)).powi(2);
    let lambda = SPLINE_END_DECAY;
    let end = |q_e: f64, j: usize, f: f64| {
        q_e * h.powi(4) / (6.0 * (1.0 - lambda).powi(2))
            * f
            * (1.0 - f)
            * lambda.powi(j as i32)
            * ((2.0 - f) + lambda * (1.0 + f))
    };
    let (q_first, q_last) = slopes.segment_end_fourth_m_per_s4[i];
    interior + end(q_first, i - ia, f) + end(q_last, ib - 1 - i, 1.0 - f)
}

/// Tide uncertainty budget of `zone`, given the feed states its tide used (each at its shifted
/// time) and each gauge's [`rate_series`].
///
/// The zone's range-ratio and time-corrector errors are one error each, common to every feed:
/// their sensitivities are summed over the feeds before squaring (correlation 1). The timing
/// component adds the second-order term of the time corrector, `½ (Σ w_i R_i g̈_i)² u⁴_Δt`. The
/// gauge component of each feed is `(w_i R_i)² (u²_gauge,i + e²_i)`, with `e_i` the estimated
/// interpolation error of its level ([`interpolation_error_m`]), an uncorrected bias counted
/// in the mean-square error.
///
/// # Units
/// Inputs as in [`GaugeUncertainty`] and [`ZoneUncertainty`]; variances in m².
pub fn tide_budget(
    zone: &Zone,
    gauges: &[Gauge],
    gauge_u: &[GaugeUncertainty],
    zone_u: &ZoneUncertainty,
    rates: &[GaugeSlopes],
    states: &[FeedState],
) -> TideBudget {
    let mut v = [0.0; 5];
    let u_dt_s = zone_u.u_time_corrector_min * 60.0;
    // Sensitivities to the common range-ratio error, the common time-corrector error (first
    // and second derivative).
    let (mut c_range, mut c_time, mut c_time2) = (0.0, 0.0, 0.0);
    if states.iter().any(|s| s.missing) {
        // A feed without level, left out of a renormalised blend: the blends' measured
        // disagreement enters the gauge component.
        v[0] += zone_u.u_renormalised_m.powi(2);
    }
    for (feed, st) in zone.feeds.iter().zip(states) {
        if st.missing {
            continue;
        }
        let g = &gauges[feed.gauge];
        let gu = &gauge_u[feed.gauge];
        let wr = st.weight * feed.range_ratio;
        let r = match zone.mean_level {
            MeanLevelForm::ZoneMean { .. } => st.level.height_m - g.mean_level_above_datum_m,
            MeanLevelForm::Scaled => st.level.height_m,
        };
        let lt = level_terms(g, gu, &rates[feed.gauge], st);
        v[0] += wr * wr * lt.var_m2;
        let (rate, curvature) = (lt.rate_m_per_s, lt.curvature_m_per_s2);
        c_range += st.weight * r;
        c_time += wr * rate;
        c_time2 += wr * curvature;
    }
    v[2] = (c_range * zone_u.u_range_ratio).powi(2);
    v[3] = (c_time * u_dt_s).powi(2) + 0.5 * (c_time2 * u_dt_s * u_dt_s).powi(2);
    v[1] = zone_datum_u(zone, gauge_u, zone_u).0.powi(2);
    v[4] = zone_u.u_zone_m.powi(2);
    TideBudget { variances_m2: v }
}

/// One gauge level's own terms at the (shifted) time it was taken.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LevelTerms {
    /// Variance of the level: sensor, interpolation between samples and gap fill, m².
    pub var_m2: f64,
    /// Rate of change of the level, m/s.
    pub rate_m_per_s: f64,
    /// Curvature of the level, m/s².
    pub curvature_m_per_s2: f64,
}

/// The level terms of gauge state `st` of gauge `g` (its `at_s` the shifted time): the
/// sensor's `u_gauge_m`, the error of interpolating between samples and the fill's own
/// uncertainty as variances; the rate and curvature from the record's slopes (the level's own
/// rate, curvature 0, when the slopes were not built for this record).
pub fn level_terms(
    g: &Gauge,
    gu: &GaugeUncertainty,
    rs: &GaugeSlopes,
    st: &FeedState,
) -> LevelTerms {
    let shifted = st.at_s;
    let built = rs.times_s.len() == g.series.times_s.len();
    let (rate, curvature) = if built {
        rs.at(st.level.bracket, shifted)
    } else {
        (st.level.rate_m_per_s, 0.0)
    };
    let e_interp = if built {
        interpolation_error_m(&g.series, rs, st.level.bracket, shifted)
    } else {
        0.0
    };
    let u_fill = g.series.fill_u_at_m(st.level.bracket, shifted);
    LevelTerms {
        var_m2: gu.u_gauge_m.powi(2) + e_interp * e_interp + u_fill * u_fill,
        rate_m_per_s: rate,
        curvature_m_per_s2: curvature,
    }
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

    fn rates(g: &[Gauge]) -> Vec<GaugeSlopes> {
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
            u_renormalised_m: 0.0,
            u_time_corrector_min: 10.0,
            u_range_ratio: 0.03,
            u_zone_m: 0.10,
            u_datum_m: None,
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
        let b = tide_budget(&zone, &g, &gu, &zu, &rates(&g), &st);
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
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), &st).components_m();
        assert_relative_eq!(c[2], 0.045, max_relative = 1e-3);
        // Scaled form: the range term is driven by g itself: 4.0 × 0.03 = 0.12 m.
        let scaled = one_feed_zone(0.0, 1.2, MeanLevelForm::Scaled);
        scaled.tide_at(&g, &Linear, t, &mut st).unwrap();
        let c = tide_budget(&scaled, &g, &gu, &zu, &rates(&g), &st).components_m();
        assert_relative_eq!(c[2], 0.12, max_relative = 1e-3);
    }

    #[test]
    fn timing_dominates_at_mid_tide_and_vanishes_at_high_water() {
        let g = vec![sine_gauge(2.5, 1.5)];
        let period_s = 360.0 / 28.984_104_2 * 3600.0;
        let zu = ZoneUncertainty {
            u_renormalised_m: 0.0,
            u_time_corrector_min: 10.0,
            u_range_ratio: 0.03,
            u_zone_m: 0.05,
            u_datum_m: None,
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
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), &st).components_m();
        let max = c.iter().cloned().fold(0.0, f64::max);
        assert_eq!(c[3], max, "timing dominates at mid-tide: {c:?}");
        // High water at the corrected time: t − 20 min = T.
        let t_hw = period_s + 1200.0;
        zone.tide_at(&g, &Linear, t_hw, &mut st).unwrap();
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), &st).components_m();
        // There the first-order term vanishes and the second-order one is left:
        // R A ω² u²_Δt / √2, times 2 (1 − cos x) / x² (x = ω · 30 min) for the ±30-min second
        // difference of a cosine: 1.1 × 1.5 × ω² × (600 s)² / √2 = 8.29 mm.
        let omega = 28.984_104_2_f64.to_radians() / 3600.0;
        let x = omega * CURVATURE_HALF_WINDOW_S;
        let expected = 1.1 * 1.5 * omega.powi(2) * 600f64.powi(2) / 2f64.sqrt()
            * (2.0 * (1.0 - x.cos()) / (x * x));
        assert_relative_eq!(c[3], expected, max_relative = 1e-2);
        assert!(c[3] < 0.01, "timing is small at high water: {c:?}");
    }

    /// The whole propagation against an independent Monte Carlo of the same model (JCGM 101:2008
    /// propagation of distributions): every input drawn from its normal distribution, the zone
    /// tide evaluated with the analytic gauge curve (not the interpolated record), 200 000 draws.
    /// The zone's range-ratio and time-corrector errors are drawn once per trial and applied to
    /// every feed (one zone-level error each); the datum error of a scaled zone is an error of
    /// the level, scaled with it. The propagation and the Monte Carlo must agree on u_tide
    /// within 2 %.
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
            u_renormalised_m: 0.0,
            u_time_corrector_min: 8.0,
            u_range_ratio: 0.04,
            u_zone_m: 0.06,
            u_datum_m: None,
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
                let gum = tide_budget(zone, &g, &gu, &zu, &rates(&g), &st).u_tide_m();
                let draws = 200_000;
                let (mut sum, mut sum2) = (0.0, 0.0);
                for _ in 0..draws {
                    let mut tide = 0.0;
                    let e_r = zu.u_range_ratio * n01.sample(&mut rng);
                    let e_dt_s = zu.u_time_corrector_min * 60.0 * n01.sample(&mut rng);
                    for f in &zone.feeds {
                        let i = f.gauge;
                        let r = f.range_ratio + e_r;
                        let dt_s = f.time_corrector_min * 60.0 + e_dt_s;
                        let level = h(i, t - dt_s) + gu[i].u_gauge_m * n01.sample(&mut rng);
                        let datum = gu[i].u_datum_m * n01.sample(&mut rng);
                        tide += f.weight
                            * match zone.mean_level {
                                MeanLevelForm::ZoneMean { .. } => r * (level - curves[i].0) + datum,
                                MeanLevelForm::Scaled => r * (level + datum),
                            };
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

    /// The datum component against a Monte Carlo of the physical errors (JCGM 101), with the
    /// zone tide computed by the reducer itself (`Zone::tide_at`), so the cancellation in the
    /// zone-mean form and the coefficient `w_i R_i` in the scaled form are the reducer's, not
    /// this test's. Each draw: gauge `i`'s zero error `e_i ~ N(0, u_datum,i)` shifts its whole
    /// record and its mean level `M_i` (the mean of its own levels, read through the same zero);
    /// the zone's chart datum error shifts `M_z` — drawn from `N(0, u_datum)` when the zone has
    /// its own value, else `Σ w_i e_i` (chart datum carried from the gauges).
    ///
    /// Two gauges, u_datum 0.04 and 0.05 m; feeds w = 0.6 / 0.4, R = 1.2 / 0.9. Expected by hand:
    /// scaled √((0.72·0.04)² + (0.36·0.05)²) = 0.033962 m (the coefficient `w_i` alone would
    /// give 0.031241 m, 8 % less); zone-mean carried √((0.6·0.04)² + (0.4·0.05)²) = 0.031241 m;
    /// zone-mean with the zone's own 0.025 m: 0.025 m, whatever the gauges' zeros. The
    /// propagated value must be within 2 % of the Monte Carlo's (40 000 draws: standard error of
    /// the Monte Carlo's standard deviation 0.35 %).
    #[test]
    fn datum_component_agrees_with_monte_carlo_of_zero_errors() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let base = vec![sine_gauge(2.5, 1.5), sine_gauge(2.2, 1.1)];
        let gu = [
            GaugeUncertainty {
                u_gauge_m: 0.0,
                u_datum_m: 0.04,
            },
            GaugeUncertainty {
                u_gauge_m: 0.0,
                u_datum_m: 0.05,
            },
        ];
        let feeds = vec![
            GaugeFeed {
                gauge: 0,
                weight: 0.6,
                time_corrector_min: 10.0,
                range_ratio: 1.2,
            },
            GaugeFeed {
                gauge: 1,
                weight: 0.4,
                time_corrector_min: -6.0,
                range_ratio: 0.9,
            },
        ];
        let zone_mean = MeanLevelForm::ZoneMean {
            zone_mean_level_above_datum_m: 2.4,
        };
        let cases = [
            (MeanLevelForm::Scaled, None, 0.033962),
            (zone_mean, None, 0.031241),
            (zone_mean, Some(0.025), 0.025),
        ];
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(20_261_202);
        let n01 = Normal::new(0.0, 1.0).unwrap();
        let t = 4.2 * 3600.0;
        for (form, u_zone_datum, by_hand) in cases {
            let zu = ZoneUncertainty {
                u_renormalised_m: 0.0,
                u_time_corrector_min: 0.0,
                u_range_ratio: 0.0,
                u_zone_m: 0.0,
                u_datum_m: u_zone_datum,
            };
            let zone = Zone {
                id: "Z".into(),
                feeds: feeds.clone(),
                mean_level: form,
            };
            let mut st = Vec::new();
            zone.tide_at(&base, &Linear, t, &mut st).unwrap();
            let gum = tide_budget(&zone, &base, &gu, &zu, &rates(&base), &st).components_m();
            assert_relative_eq!(gum[1], by_hand, max_relative = 1e-5);
            assert!(gum[0] == 0.0 && gum[2] == 0.0 && gum[3] == 0.0 && gum[4] == 0.0);
            let draws: Vec<f64> = (0..40_000)
                .map(|_| {
                    let e: Vec<f64> = gu
                        .iter()
                        .map(|u| u.u_datum_m * n01.sample(&mut rng))
                        .collect();
                    let shifted: Vec<Gauge> = base
                        .iter()
                        .zip(&e)
                        .map(|(g, e)| {
                            let mut g = g.clone();
                            g.series.heights_m.iter_mut().for_each(|h| *h += e);
                            g.mean_level_above_datum_m += e;
                            g
                        })
                        .collect();
                    let e_zone = match u_zone_datum {
                        Some(u) => u * n01.sample(&mut rng),
                        None => feeds.iter().map(|f| f.weight * e[f.gauge]).sum(),
                    };
                    let drawn = Zone {
                        id: "Z".into(),
                        feeds: feeds.clone(),
                        mean_level: match form {
                            MeanLevelForm::ZoneMean {
                                zone_mean_level_above_datum_m: m,
                            } => MeanLevelForm::ZoneMean {
                                zone_mean_level_above_datum_m: m + e_zone,
                            },
                            MeanLevelForm::Scaled => MeanLevelForm::Scaled,
                        },
                    };
                    drawn.tide_at(&shifted, &Linear, t, &mut st).unwrap()
                })
                .collect();
            let (mc, _) = sd_and_error(&draws);
            assert!(
                ((gum[1] - mc) / mc).abs() < 0.02,
                "{form:?}, zone datum {u_zone_datum:?}: GUM {:.5} m, Monte Carlo {mc:.5} m",
                gum[1]
            );
        }
    }

    /// Two feeds, one common corrector error each, by hand.
    ///
    /// Gauges h₁ = 2.5 + 1.5 cos ωt and h₂ = 2.2 + 1.1 cos ωt (M2, in phase); weights 0.6 and
    /// 0.4, range ratios 1.15 and 0.9, time correctors 0; u_Δt = 10 min, u_R = 0.03.
    /// * Mid-tide (t = T/4): ġ₁ = −1.5 ω, ġ₂ = −1.1 ω. Timing = |0.6·1.15·1.5 + 0.4·0.9·1.1| ω
    ///   u_Δt = 1.431 × 0.00843113 /min × 10 min = 0.120649 m, times 0.99600 for the ±15-min
    ///   difference = 0.120167 m. Summed as independent it would be
    ///   sqrt(1.035² + 0.396²) ω u_Δt = 0.09343 m.
    /// * High water (t = T), zone-mean form: r₁ = 1.5, r₂ = 1.1. Range = (0.6·1.5 + 0.4·1.1) u_R
    ///   = 1.34 × 0.03 = 0.0402 m (independent: 0.03005 m).
    #[test]
    fn common_corrector_errors_add_linearly_over_feeds() {
        let g = vec![sine_gauge(2.5, 1.5), sine_gauge(2.2, 1.1)];
        let period_s = 360.0 / 28.984_104_2 * 3600.0;
        let zu = ZoneUncertainty {
            u_renormalised_m: 0.0,
            u_time_corrector_min: 10.0,
            u_range_ratio: 0.03,
            u_zone_m: 0.0,
            u_datum_m: None,
        };
        let gu = [GaugeUncertainty {
            u_gauge_m: 0.0,
            u_datum_m: 0.0,
        }; 2];
        let feed = |gauge, weight, range_ratio| GaugeFeed {
            gauge,
            weight,
            time_corrector_min: 0.0,
            range_ratio,
        };
        let zone = Zone {
            id: "Z".into(),
            feeds: vec![feed(0, 0.6, 1.15), feed(1, 0.4, 0.9)],
            mean_level: MeanLevelForm::ZoneMean {
                zone_mean_level_above_datum_m: 2.4,
            },
        };
        let mut st = Vec::new();
        let t = period_s / 4.0;
        zone.tide_at(&g, &Linear, t, &mut st).unwrap();
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), &st).components_m();
        assert_relative_eq!(c[3], 0.120167, max_relative = 2e-3);
        assert!(c[3] > 0.1, "not the independent sum 0.09343 m: {}", c[3]);
        let t = period_s;
        zone.tide_at(&g, &Linear, t, &mut st).unwrap();
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), &st).components_m();
        assert_relative_eq!(c[2], 0.0402, max_relative = 1e-3);
    }

    /// Standard deviation of Monte Carlo draws and its standard error,
    /// sqrt((m₄ − σ⁴) / N) / (2σ) (the delta method on the sample variance).
    fn sd_and_error(draws: &[f64]) -> (f64, f64) {
        let n = draws.len() as f64;
        let mean = draws.iter().sum::<f64>() / n;
        let var = draws.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n;
        let m4 = draws.iter().map(|x| (x - mean).powi(4)).sum::<f64>() / n;
        let sd = var.sqrt();
        (sd, ((m4 - var * var) / n).sqrt() / (2.0 * sd))
    }

    /// At high and low water of a pure M2 tide (A = 1.5 m, one feed, R = 1) with u_Δt = 30 min
    /// and no other uncertainty, the propagated u_tide (first and second order) against a Monte
    /// Carlo (JCGM 101: Δt drawn from N(0, 30 min), the analytic curve evaluated, 400 000
    /// draws). Expected: the exact standard deviation of A cos(ω δ) with δ ~ N(0, u) is
    /// A sqrt((1 + e^(−2s²))/2 − e^(−s²)), s = ω u = 0.25293: 0.04382 A; the second-order term is
    /// A s² / √2 = 0.04524 A, times 0.99467 for the ±30-min second difference: 0.04500 A, 2.7 %
    /// above. The propagated value must be within 5 % of the Monte Carlo's and never below it by
    /// more than one standard error of the Monte Carlo. At mid-tide the exact value is
    /// A sqrt((1 − e^(−2s²))/2) = 0.24505 A and the first-order one A s = 0.25293 A (times
    /// 0.99600 for the ±15-min difference: 0.25192 A, 2.8 % above, the negative fourth-order
    /// term ġ ⃛g u⁴ being left out): the same two checks hold.
    #[test]
    fn turning_points_agree_with_monte_carlo() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let (mean, amp) = (2.5, 1.5);
        let omega = 28.984_104_2_f64.to_radians() / 3600.0;
        let period_s = 360.0 / 28.984_104_2 * 3600.0;
        let g = vec![sine_gauge(mean, amp)];
        let zu = ZoneUncertainty {
            u_renormalised_m: 0.0,
            u_time_corrector_min: 30.0,
            u_range_ratio: 0.0,
            u_zone_m: 0.0,
            u_datum_m: None,
        };
        let gu = [GaugeUncertainty {
            u_gauge_m: 0.0,
            u_datum_m: 0.0,
        }];
        let zone = one_feed_zone(0.0, 1.0, MeanLevelForm::Scaled);
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(20_261_202);
        let normal = Normal::new(0.0, 1800.0).unwrap();
        let s = omega * 1800.0;
        let exact = amp * ((1.0 + (-2.0 * s * s).exp()) / 2.0 - (-s * s).exp()).sqrt();
        let exact_mid = amp * ((1.0 - (-2.0 * s * s).exp()) / 2.0).sqrt();
        // High water, low water, high water, and mid-tide.
        for (t, turning) in [
            (period_s, true),
            (1.5 * period_s, true),
            (0.5 * period_s, true),
            (0.75 * period_s, false),
        ] {
            let mut st = Vec::new();
            zone.tide_at(&g, &Linear, t, &mut st).unwrap();
            let gum = tide_budget(&zone, &g, &gu, &zu, &rates(&g), &st).u_tide_m();
            let draws: Vec<f64> = (0..400_000)
                .map(|_| mean + amp * (omega * (t - normal.sample(&mut rng))).cos())
                .collect();
            let (mc, se) = sd_and_error(&draws);
            let msg =
                format!("t = {t:.0} s: propagated {gum:.5} m, Monte Carlo {mc:.5} ± {se:.5} m");
            // The Monte Carlo itself against the closed form, within 3 standard errors.
            let exact = if turning { exact } else { exact_mid };
            assert!((mc - exact).abs() < 3.0 * se, "{msg}, exact {exact:.5} m");
            assert!(((gum - mc) / mc).abs() < 0.05, "{msg}");
            assert!(gum >= mc - se, "{msg}");
        }
    }

    /// A stuck sensor set aside for 90 min around high water (from HW − 20 min to HW + 70 min):
    /// the rate at the samples either side comes from their own side, not from the chord across
    /// the run. Expected: the true rate −A ω sin(ω t'), within the one-sided difference's bound
    /// A ω² w / 2 (w = 15 min) = 1.33e-5 m/s. The chord would be (h(HW + 71) − h(HW − 21)) /
    /// 92 min = −4.3e-5 m/s, of the wrong sign before high water.
    #[test]
    fn the_rate_beside_a_flagged_run_comes_from_its_own_side() {
        let (mean, amp) = (2.5, 1.5);
        let omega = 28.984_104_2_f64.to_radians() / 3600.0;
        let mut g = sine_gauge(mean, amp);
        // High water at t = 720 min (12.42 h is the period; 720 min is near the second HW at
        // 745.2 min): use the sample nearest to it as the centre.
        let hw_min = (360.0 / 28.984_104_2 * 60.0_f64).round();
        let (from, to) = (hw_min - 20.0, hw_min + 70.0);
        let s = &mut g.series;
        let keep: Vec<bool> = s
            .times_s
            .iter()
            .map(|t| *t / 60.0 < from || *t / 60.0 > to)
            .collect();
        s.flagged_times_s = s
            .times_s
            .iter()
            .zip(&keep)
            .filter(|(_, k)| !**k)
            .map(|(t, _)| *t)
            .collect();
        let mut i = 0;
        s.heights_m.retain(|_| {
            i += 1;
            keep[i - 1]
        });
        s.times_s.retain(|t| *t / 60.0 < from || *t / 60.0 > to);
        let slopes = rate_series(&g, &Linear);
        let bound = amp * omega * omega * RATE_HALF_WINDOW_S / 2.0 + 1e-9;
        for t_min in [from - 1.0, to + 1.0] {
            let k = g
                .series
                .times_s
                .iter()
                .position(|&t| t == t_min * 60.0)
                .unwrap();
            let truth = -amp * omega * (omega * t_min * 60.0).sin();
            let got = slopes.rate_m_per_s[k];
            assert!(
                (got - truth).abs() <= bound,
                "at {t_min} min: {got:e} against {truth:e}"
            );
        }
        // The timing term just before the run, with u_Δt = 10 min: R |ġ| u_Δt ≤ (|truth| + bound)
        // × 600 s = 30.3 mm, against 26 mm from the chord's −4.3e-5 m/s… of the wrong sign.
        let t_before = (from - 1.0) * 60.0;
        let truth = -amp * omega * (omega * t_before).sin();
        assert!(truth > 0.0, "rising before high water");
        let k = g
            .series
            .times_s
            .iter()
            .position(|&t| t == t_before)
            .unwrap();
        assert!(
            slopes.rate_m_per_s[k] > 0.0,
            "the chord's sign is not taken"
        );
    }

    /// M2 + S2 + K1, invented amplitudes and phases (speeds from `shared/constituents.md`):
    /// the level above chart datum, m, and its curve's curvature is about 2.3e-8 m/s² at most.
    fn three_constituents_m(t_s: f64) -> f64 {
        let hours = t_s / 3600.0;
        [
            (1.5, 28.984_104_2, 30.0),
            (0.5, 30.0, 100.0),
            (0.3, 15.041_068_6, 250.0),
        ]
        .iter()
        .map(|&(a, speed, phase): &(f64, f64, f64)| a * (speed * hours - phase).to_radians().cos())
        .sum::<f64>()
            + 2.6
    }

    /// A record of [`three_constituents_m`] every `step_s` over 20 days; with `hole_every_h`,
    /// two hours of samples are left out every that many hours (a gap longer than the maximum
    /// gap: many unbroken segments, ends at every phase of the tide).
    fn sampled(step_s: f64, hole_every_h: Option<f64>, spline: bool) -> Gauge {
        let t0 = 1.7806e9;
        let times: Vec<f64> = (0..)
            .map(|k| t0 + k as f64 * step_s)
            .take_while(|t| *t <= t0 + 20.0 * 86_400.0)
            .filter(|t| match hole_every_h {
                Some(p) => ((t - t0) / 3600.0).rem_euclid(p) < p - 2.0,
                None => true,
            })
            .collect();
        let mut series = LevelSeries {
            heights_m: times.iter().map(|&t| three_constituents_m(t)).collect(),
            times_s: times,
            max_gap_s: step_s,
            ..Default::default()
        };
        if spline {
            series.spline_m_per_s2 = crate::compute::spline::spline_second_derivatives(
                &series.times_s,
                &series.heights_m,
                &series.unbridged(),
                crate::compute::spline::SplineEnds::NotAKnot,
            );
        }
        Gauge {
            id: "c".into(),
            series,
            mean_level_above_datum_m: 2.6,
        }
    }

    /// RMS of the actual interpolation error and of the estimated one, and the RMS of their
    /// difference, over instants at fractions 0.05, 0.15, …, 0.95 of every interpolated
    /// bracket whose distance (in intervals) from its segment's nearer end passes `keep`.
    fn error_rms(g: &Gauge, keep: impl Fn(usize) -> bool) -> (f64, f64, f64, usize) {
        use crate::compute::series::{Configured, TimeInterpolation};
        let s = &g.series;
        let slopes = rate_series(g, &Configured);
        let (mut actual, mut stated, mut diff, mut n) = (0.0, 0.0, 0.0, 0);
        for i in 0..s.times_s.len() - 1 {
            let (ia, ib) = slopes.segment[i];
            if i >= ib || !keep((i - ia).min(ib - 1 - i)) {
                continue;
            }
            for k in 0..10 {
                let t = s.times_s[i] + (0.05 + 0.1 * k as f64) * (s.times_s[i + 1] - s.times_s[i]);
                let at = Configured.level_at(s, t).unwrap();
                assert_eq!(at.bracket, i);
                let e = at.height_m - three_constituents_m(t);
                let est = interpolation_error_m(s, &slopes, i, t);
                actual += e * e;
                stated += est * est;
                diff += (e - est).powi(2);
                n += 1;
            }
        }
        let rms = |x: f64| (x / n as f64).sqrt();
        (rms(actual), rms(stated), rms(diff), n)
    }

    /// The interpolation term against the actual interpolation error of a known curve
    /// (M2 + S2 + K1, 20 days), sampled every 30 min and every hour, linear and spline. The term
    /// is the estimated error at the instant (not a bound), so its RMS over many instants must
    /// match the RMS of the actual error within 20 %, and the estimate must follow the error
    /// instant by instant: the RMS of their difference below half the actual RMS (0.7 of it in
    /// the spline's end brackets, where the error is below 1 mm RMS hourly). A term taken
    /// as the bracket's maximum, `|g̈| Δt² / 8`, would be √30 / 4 = 1.37 times too large in RMS
    /// (the mean of `(f (1 − f))²` over the bracket is 1/30), and fail.
    ///
    /// Expected sizes (Taylor remainder of linear interpolation, any numerical-analysis text, from
    /// memory): linear, hourly, `A (ωΔt)² / 8` is 48 mm for the 1.5-m M2 alone.
    #[test]
    fn interpolation_term_matches_the_actual_interpolation_error() {
        let mut failed = Vec::new();
        for step_s in [1800.0, 3600.0] {
            // Linear, one long segment.
            let (a, e, d, n) = error_rms(&sampled(step_s, None, false), |_| true);
            let msg = format!(
                "linear, {step_s} s: actual RMS {:.3} mm, term RMS {:.3} mm, difference RMS \
                 {:.3} mm, {n} instants",
                a * 1e3,
                e * 1e3,
                d * 1e3
            );
            println!("{msg}");
            assert!(a > 0.002, "{msg}");
            assert!((e / a - 1.0).abs() < 0.2, "{msg}");
            assert!(d < 0.5 * a, "{msg}");
            // Spline, a segment a day: the ends (the first three intervals from an end)
            // and the interior (six intervals or more from an end), each on its own.
            let g = sampled(step_s, Some(23.3), true);
            for (what, near) in [("ends", true), ("interior", false)] {
                let (a, e, d, n) = error_rms(&g, |j| if near { j < 3 } else { j >= 6 });
                let msg = format!(
                    "spline {what}, {step_s} s: actual RMS {:.4} mm, term RMS {:.4} mm, \
                     difference RMS {:.4} mm, {n} instants",
                    a * 1e3,
                    e * 1e3,
                    d * 1e3
                );
                println!("{msg}");
                // The end term's fourth derivative is the parabola's through the curvatures one
                // to three steps inside, so it follows the error less closely there (measured:
                // difference 0.56 and 0.61 of the actual RMS at 30 min and hourly).
                let follows = if near { 0.7 } else { 0.5 };
                if (e / a - 1.0).abs() >= 0.2 || d >= follows * a {
                    failed.push(msg);
                }
            }
        }
        assert!(failed.is_empty(), "{failed:#?}");
    }

    /// The gauge component carries the interpolation error in quadrature, scaled by `R`: an
    /// hourly record of `h = 2.5 + 1.5 cos ωt` (M2), interpolated linearly, at high water half-way
    /// between two samples. Expected: `e = ½ g̈ Δt² / 4` with `g̈` the ±1-h second difference of
    /// the samples, `−A ω² · 2 (1 − cos x) / x²` (x = ωΔt) averaged linearly between the two
    /// samples (each `cos(x/2)` of the high-water value): 1.5 × ω² × 0.97886 × 0.96818 × 3600² / 8
    /// = 45.47 mm; gauge component `R sqrt(u_gauge² + e²)` with `R` = 1.2, `u_gauge` = 0.02 m.
    /// The actual error, the chord's midpoint below high water, is `A (1 − cos(x/2))` = 47.73 mm:
    /// the estimate is 4.7 % low (the two factors, and the Taylor terms beyond the second).
    #[test]
    fn gauge_component_adds_the_interpolation_error_in_quadrature() {
        let (mean, amp) = (2.5, 1.5);
        let omega = 28.984_104_2_f64.to_radians() / 3600.0;
        let period_s = 360.0 / 28.984_104_2 * 3600.0;
        // Samples every hour, placed so that a high water (t = 2T) falls half-way between two.
        let times: Vec<f64> = (0..=48)
            .map(|k| 2.0 * period_s - 24.5 * 3600.0 + k as f64 * 3600.0)
            .collect();
        let g = vec![Gauge {
            id: "h".into(),
            series: LevelSeries {
                heights_m: times
                    .iter()
                    .map(|t| mean + amp * (omega * t).cos())
                    .collect(),
                times_s: times,
                max_gap_s: 3600.0,
                ..Default::default()
            },
            mean_level_above_datum_m: mean,
        }];
        let zu = ZoneUncertainty {
            u_renormalised_m: 0.0,
            u_time_corrector_min: 0.0,
            u_range_ratio: 0.0,
            u_zone_m: 0.0,
            u_datum_m: None,
        };
        let gu = [GaugeUncertainty {
            u_gauge_m: 0.02,
            u_datum_m: 0.0,
        }];
        let zone = one_feed_zone(0.0, 1.2, MeanLevelForm::Scaled);
        let t = 2.0 * period_s;
        let mut st = Vec::new();
        zone.tide_at(&g, &Linear, t, &mut st).unwrap();
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), &st).components_m();
        let x = omega * 3600.0;
        let e = amp
            * omega
            * omega
            * (2.0 * (1.0 - x.cos()) / (x * x))
            * (x / 2.0).cos()
            * 3600f64.powi(2)
            / 8.0;
        assert_relative_eq!(e, 0.04547, max_relative = 1e-3);
        assert_relative_eq!(
            c[0],
            1.2 * (0.02f64.powi(2) + e * e).sqrt(),
            max_relative = 1e-9
        );
        // The actual error there: the chord's midpoint against the high water, A (1 − cos(x/2)).
        let actual = amp * (1.0 - (x / 2.0).cos());
        assert_relative_eq!(e, actual, max_relative = 0.06);
        assert_relative_eq!(actual, 0.04773, max_relative = 1e-3);
        // At a sample the term is 0 and the component is the sensor's alone.
        let t = g[0].series.times_s[20];
        zone.tide_at(&g, &Linear, t, &mut st).unwrap();
        let c = tide_budget(&zone, &g, &gu, &zu, &rates(&g), &st).components_m();
        assert_relative_eq!(c[0], 1.2 * 0.02, max_relative = 1e-12);
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
