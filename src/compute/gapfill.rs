//! Filling gaps in a gauge record from a reference: the gauge's own harmonic prediction, or a
//! neighbouring gauge carried through the zoning's correctors.
//!
//! Owns: [`FillMethod`], [`MethodChoice`], [`Reference`], [`FillSettings`], [`FillErrorModel`],
//! [`FillRefusal`], [`FillSpan`] and [`fill_series`].
//!
//! A gap is an interval between two usable samples that interpolation may not bridge: longer
//! than the series' maximum gap, or enclosing samples quality control set aside. A filled gap
//! gets samples at the record's nominal step:
//!
//! ```text
//! fill(t) = r(t) + d₀ + (d₁ − d₀) · (t − t₀)/(t₁ − t₀)
//! ```
//!
//! where `r` is the reference, `t₀`, `t₁` the gap's edge samples and `d₀`, `d₁` the mean
//! mismatch `h − r` of the observed samples within [`FillSettings::edge_window_s`] before `t₀`
//! (down to it) and after `t₁` (from it). For the prediction reference `d` is the observed
//! non-tidal residual, so the fill is the residual-corrected prediction; for a neighbour it is
//! the offset that makes the neighbour meet both edges.
//!
//! The fill's standard uncertainty is measured on the record itself: gaps of the same length
//! are cut out of unbroken stretches of the record, filled the same way, and the errors fitted
//! by `u²(f) = u_mid² · 4 f (1 − f) + u_edge²` (`f` the position in the gap, 0 to 1) — the
//! variance of a random walk pinned at both ends, plus a floor for the edge mismatches' own
//! error. Too few such gaps and the gap is not filled.
//!
//! # References
//! Residual-corrected prediction across a gap is common practice (the project's field primer,
//! §3); the pinned-random-walk shape of the error is the Brownian bridge's variance
//! `f (1 − f)` (from memory).

use super::harmonic::{predict_at, HarmonicConstants};
use super::series::{LevelSeries, Linear, TimeInterpolation};

/// How a gap was filled.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum FillMethod {
    /// The gauge's harmonic prediction plus its observed residual interpolated across the gap.
    PredictionResidual,
    /// A neighbouring gauge's level carried through the correctors, offset to meet both edges.
    Neighbour,
}

impl FillMethod {
    /// The name used in the project file and in status details.
    pub fn as_str(self) -> &'static str {
        match self {
            FillMethod::PredictionResidual => "prediction_residual",
            FillMethod::Neighbour => "neighbour",
        }
    }
}

/// Which method a gauge's gaps are filled by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[non_exhaustive]
pub enum MethodChoice {
    /// Of the references available, the one whose fill best matches the gap's edges (the smallest
    /// [`EdgeFit::misfit_rms_m`]); prediction wins a tie.
    #[default]
    Auto,
    /// Only the prediction from the gauge's harmonic constants.
    PredictionResidual,
    /// Only a neighbouring gauge (the best-matching, when there are several).
    Neighbour,
}

/// A neighbouring gauge's level carried to this gauge:
/// `r(t) = M_self + ratio · (h_other(t − lag) − M_other)`.
#[derive(Debug, Clone)]
pub struct NeighbourRelation<'a> {
    /// Index of the neighbouring gauge (for reports).
    pub gauge: usize,
    /// The neighbour's series (its own samples, never filled ones).
    pub series: &'a LevelSeries,
    /// How much later the tide arrives at this gauge than at the neighbour, seconds.
    pub lag_s: f64,
    /// This gauge's range over the neighbour's.
    pub ratio: f64,
    /// This gauge's mean level above chart datum, metres.
    pub self_mean_m: f64,
    /// The neighbour's mean level above chart datum, metres.
    pub other_mean_m: f64,
}

/// A reference a gap can be filled from.
#[derive(Debug, Clone)]
pub enum Reference<'a> {
    /// The gauge's harmonic prediction.
    Prediction(&'a HarmonicConstants),
    /// A neighbouring gauge.
    Neighbour(NeighbourRelation<'a>),
}

impl Reference<'_> {
    /// The reference level at `t_s` (UTC seconds), metres; `None` where a neighbour has none.
    pub fn at(&self, t_s: f64) -> Option<f64> {
        match self {
            Reference::Prediction(k) => Some(predict_at(k, t_s)),
            Reference::Neighbour(n) => Linear
                .level_at(n.series, t_s - n.lag_s)
                .ok()
                .map(|l| n.self_mean_m + n.ratio * (l.height_m - n.other_mean_m)),
        }
    }

    /// The method this reference fills by.
    pub fn method(&self) -> FillMethod {
        match self {
            Reference::Prediction(_) => FillMethod::PredictionResidual,
            Reference::Neighbour(_) => FillMethod::Neighbour,
        }
    }
}

/// The relation of gauge `a` to gauge `b` from a zone both feed: the zone's tide is
/// `M_z + R_a (h_a(t − Δt_a) − M_a)` from `a` and `M_z + R_b (h_b(t − Δt_b) − M_b)` from `b`;
/// equating them, `h_a(s) − M_a = (R_b / R_a) (h_b(s − (Δt_b − Δt_a)) − M_b)`.
/// Returns `(lag_s, ratio)` for [`NeighbourRelation`].
///
/// # Units
/// Time correctors in minutes, result seconds and a dimensionless ratio.
pub fn relation_from_zone(
    a_time_corrector_min: f64,
    a_range_ratio: f64,
    b_time_corrector_min: f64,
    b_range_ratio: f64,
) -> (f64, f64) {
    (
        (b_time_corrector_min - a_time_corrector_min) * 60.0,
        b_range_ratio / a_range_ratio,
    )
}

/// The relation of gauge `a` to gauge `b` from their dominant constituent's amplitude and phase
/// lag (the field primer's §4.2): the tide reaches `a` `(G_a − G_b)/ω` later, with `H_a / H_b`
/// of the range. The phase difference is taken within ±180°. Returns `(lag_s, ratio)`.
///
/// # Units
/// Amplitudes metres, phase lags degrees, speed degrees per hour.
pub fn relation_from_constants(
    a_h_m: f64,
    a_g_deg: f64,
    b_h_m: f64,
    b_g_deg: f64,
    speed_deg_per_h: f64,
) -> (f64, f64) {
    let dg = (a_g_deg - b_g_deg + 540.0).rem_euclid(360.0) - 180.0;
    (dg / speed_deg_per_h * 3600.0, a_h_m / b_h_m)
}

/// Where a relation between two gauges comes from.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
pub enum RelationSource {
    /// A zone both gauges feed (its index).
    Zone(usize),
    /// The two gauges' constants, by their largest common constituent (its speed, °/h).
    Constants {
        /// Speed of the constituent used, degrees per hour.
        speed_deg_per_h: f64,
    },
}

/// Gauge `a`'s relation to gauge `b`: `(lag_s, ratio, source)` for [`NeighbourRelation`], from
/// the first zone both feed ([`relation_from_zone`]) or else their constants'
/// largest common constituent (M2 in semidiurnal waters; [`relation_from_constants`]). `None`
/// when neither gives one.
pub fn gauge_relation(
    a: usize,
    b: usize,
    zones: &[super::zoning::Zone],
    constants: &[Option<&HarmonicConstants>],
) -> Option<(f64, f64, RelationSource)> {
    for (zi, z) in zones.iter().enumerate() {
        let fa = z.feeds.iter().find(|f| f.gauge == a);
        let fb = z.feeds.iter().find(|f| f.gauge == b);
        if let (Some(fa), Some(fb)) = (fa, fb) {
            let (lag_s, ratio) = relation_from_zone(
                fa.time_corrector_min,
                fa.range_ratio,
                fb.time_corrector_min,
                fb.range_ratio,
            );
            return Some((lag_s, ratio, RelationSource::Zone(zi)));
        }
    }
    let (ka, kb) = (constants.get(a).copied()??, constants.get(b).copied()??);
    // The largest constituent the two share (by the smaller of its two amplitudes).
    let mut best: Option<(f64, f64, f64, f64, f64, f64)> = None;
    for (ca, ha, ga) in &ka.constituents {
        if let Some((_, hb, gb)) = kb.constituents.iter().find(|(cb, _, _)| cb.name == ca.name) {
            let size = ha.min(*hb);
            if *hb > 0.0 && best.is_none_or(|b| size > b.0) {
                best = Some((size, *ha, *ga, *hb, *gb, ca.speed_deg_per_h));
            }
        }
    }
    let (_, ha, ga, hb, gb, speed) = best?;
    let (lag_s, ratio) = relation_from_constants(ha, ga, hb, gb, speed);
    Some((
        lag_s,
        ratio,
        RelationSource::Constants {
            speed_deg_per_h: speed,
        },
    ))
}

/// Settings of gap filling.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FillSettings {
    /// Longest gap filled, seconds (between the two usable samples around it).
    pub max_fill_s: f64,
    /// Window of observed samples on each side whose mean mismatch sets the edge offsets, seconds.
    pub edge_window_s: f64,
    /// Fewest artificial gaps the error model needs; with fewer the gap is not filled.
    pub min_trials: usize,
}

/// Fewest artificial gaps of the gap's length the error of a fill is measured on (see the
/// module documentation). Ten gaps give the RMS to about ±25 % (1/√(2·10) for independent
/// errors; from memory) — coarse, but measured rather than guessed.
pub const MIN_TRIALS: usize = 10;

/// How well a reference matches a gap's edges.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EdgeFit {
    /// Mean mismatch `h − r` over the window before the gap, metres.
    pub before_m: f64,
    /// Mean mismatch over the window after the gap, metres.
    pub after_m: f64,
    /// RMS of the mismatches about their side's mean, over both windows, metres: how well the
    /// reference's shape follows the record beside the gap.
    pub misfit_rms_m: f64,
}

/// Mismatches of `reference` against the observed samples beside the gap from sample `i0` to
/// sample `i1` (`i0 < i1`): the window before runs from `t[i0] − window` to `t[i0]`, the one
/// after from `t[i1]` to `t[i1] + window`, each stopping at an interval that may not be bridged
/// (`unbridged[j]` is about the interval from `j` to `j + 1`). `None` when a side has no
/// sample with a reference value.
pub fn edge_fit(
    series: &LevelSeries,
    unbridged: &[bool],
    i0: usize,
    i1: usize,
    reference: &Reference<'_>,
    window_s: f64,
) -> Option<EdgeFit> {
    let t = &series.times_s;
    let h = &series.heights_m;
    let mut before = Vec::new();
    let mut j = i0;
    loop {
        if t[i0] - t[j] > window_s {
            break;
        }
        if let Some(r) = reference.at(t[j]) {
            before.push(h[j] - r);
        }
        if j == 0 || unbridged[j - 1] {
            break;
        }
        j -= 1;
    }
    let mut after = Vec::new();
    let mut j = i1;
    loop {
        if t[j] - t[i1] > window_s {
            break;
        }
        if let Some(r) = reference.at(t[j]) {
            after.push(h[j] - r);
        }
        if j + 1 >= t.len() || unbridged[j] {
            break;
        }
        j += 1;
    }
    if before.is_empty() || after.is_empty() {
        return None;
    }
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let (b, a) = (mean(&before), mean(&after));
    let ss: f64 = before.iter().map(|x| (x - b).powi(2)).sum::<f64>()
        + after.iter().map(|x| (x - a).powi(2)).sum::<f64>();
    Some(EdgeFit {
        before_m: b,
        after_m: a,
        misfit_rms_m: (ss / (before.len() + after.len()) as f64).sqrt(),
    })
}

/// The filled level at `t_s` inside the gap from `t0_s` to `t1_s`, metres (module formula).
pub fn fill_at(
    reference: &Reference<'_>,
    fit: &EdgeFit,
    t0_s: f64,
    t1_s: f64,
    t_s: f64,
) -> Option<f64> {
    let f = (t_s - t0_s) / (t1_s - t0_s);
    reference
        .at(t_s)
        .map(|r| r + fit.before_m + (fit.after_m - fit.before_m) * f)
}

/// The measured error of a method's fills of one gap length: `u²(f) = u_mid² · 4f(1−f) + u_edge²`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FillErrorModel {
    /// Standard uncertainty added mid-gap above the edge floor, metres.
    pub u_mid_m: f64,
    /// Standard uncertainty at the gap's edges (the edge offsets' own error), metres.
    pub u_edge_m: f64,
    /// Standard deviation of the record's sample-to-sample noise taken off the measured
    /// errors, metres.
    pub noise_m: f64,
    /// Artificial gaps measured.
    pub trials: usize,
    /// Filled samples compared with the record.
    pub samples: usize,
}

impl FillErrorModel {
    /// Standard uncertainty of a filled level at position `f` in the gap (0 at the opening edge,
    /// 1 at the closing one), metres.
    pub fn u_at_m(&self, f: f64) -> f64 {
        let f = f.clamp(0.0, 1.0);
        (self.u_mid_m.powi(2) * 4.0 * f * (1.0 - f) + self.u_edge_m.powi(2)).sqrt()
    }
}

/// Least-squares fit of `e² ≈ a·w + c` (`w = 4f(1−f)`), with `a, c ≥ 0`, on `(f, e)` pairs.
/// Returns `(u_mid, u_edge) = (√a, √c)`.
pub fn fit_error_shape(pairs: &[(f64, f64)]) -> (f64, f64) {
    let n = pairs.len() as f64;
    if pairs.is_empty() {
        return (0.0, 0.0);
    }
    let (mut sw, mut sww, mut sy, mut swy) = (0.0, 0.0, 0.0, 0.0);
    for &(f, e) in pairs {
        let w = 4.0 * f * (1.0 - f);
        let y = e * e;
        sw += w;
        sww += w * w;
        sy += y;
        swy += w * y;
    }
    let det = n * sww - sw * sw;
    let (mut a, mut c) = if det.abs() > 1e-12 * n * sww.max(1e-300) {
        ((n * swy - sw * sy) / det, (sww * sy - sw * swy) / det)
    } else {
        (0.0, sy / n)
    };
    if a < 0.0 {
        a = 0.0;
        c = sy / n;
    }
    if c < 0.0 {
        c = 0.0;
        a = if sww > 0.0 { swy / sww } else { 0.0 };
    }
    (a.sqrt(), c.sqrt())
}

/// Measures the error of filling gaps of `length_s` from `reference`: artificial gaps are cut out
/// of stretches of the record with no unbridgeable interval from `edge_window_s` before to
/// `edge_window_s` after them, starting every half gap length, filled, and compared with the
/// samples held out. `None` when fewer than `min_trials` such gaps could be filled.
pub fn measure_fill_error(
    series: &LevelSeries,
    unbridged: &[bool],
    length_s: f64,
    reference: &Reference<'_>,
    settings: &FillSettings,
) -> Option<FillErrorModel> {
    let t = &series.times_s;
    let n = t.len();
    if n < 3 {
        return None;
    }
    // Prefix count of unbridged intervals, to test a stretch in O(1).
    let mut bad = vec![0usize; n];
    for j in 1..n {
        bad[j] = bad[j - 1] + usize::from(unbridged[j - 1]);
    }
    let clean = |a: usize, b: usize| bad[b] == bad[a];
    let mut pairs = Vec::new();
    let (mut diff2, mut n_diff) = (0.0, 0usize);
    let mut trials = 0;
    let mut next_start_s = f64::NEG_INFINITY;
    let w = settings.edge_window_s;
    for a in 0..n {
        if t[a] < next_start_s || t[a] - t[0] < w {
            continue;
        }
        let b = t.partition_point(|&x| x < t[a] + length_s);
        if b >= n || b <= a + 1 {
            break;
        }
        let lo = t.partition_point(|&x| x < t[a] - w);
        let hi = t.partition_point(|&x| x <= t[b] + w).saturating_sub(1);
        if t[n - 1] - t[b] < w || !clean(lo, hi) {
            continue;
        }
        let Some(fit) = edge_fit(series, unbridged, a, b, reference, w) else {
            continue;
        };
        let mut got = Vec::with_capacity(b - a - 1);
        for k in a + 1..b {
            match fill_at(reference, &fit, t[a], t[b], t[k]) {
                Some(v) => got.push(((t[k] - t[a]) / (t[b] - t[a]), v - series.heights_m[k])),
                None => {
                    got.clear();
                    break;
                }
            }
        }
        if got.is_empty() {
            continue;
        }
        for w in got.windows(2) {
            diff2 += (w[1].1 - w[0].1).powi(2);
            n_diff += 1;
        }
        pairs.extend(got);
        trials += 1;
        next_start_s = t[a] + 0.5 * length_s;
    }
    if trials < settings.min_trials {
        return None;
    }
    let (u_mid_m, u_edge_m) = fit_error_shape(&pairs);
    // The errors are measured against samples that carry the sensor's own noise, which a filled
    // level does not have (the gauge's sensor term covers it apart): its variance, estimated as
    // half the mean squared step of the errors between neighbouring held-out samples (white
    // noise doubles in a difference; the fill itself is smooth), is taken off the edge floor.
    let noise_var_m2 = if n_diff > 0 {
        diff2 / (2.0 * n_diff as f64)
    } else {
        0.0
    };
    Some(FillErrorModel {
        u_mid_m,
        u_edge_m: (u_edge_m * u_edge_m - noise_var_m2).max(0.0).sqrt(),
        noise_m: noise_var_m2.sqrt(),
        trials,
        samples: pairs.len(),
    })
}

/// Why a gap was not filled (`io::text` words it).
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
pub enum FillRefusal {
    /// The gap is longer than the longest fill allowed.
    TooLong {
        /// The gap's length, seconds.
        length_s: f64,
        /// The longest fill allowed, seconds.
        max_s: f64,
    },
    /// The gauge has no reference of the method asked for (no constants, no neighbour).
    NoReference {
        /// The method asked for; `None` for any (auto).
        wanted: Option<FillMethod>,
    },
    /// No reference has a value across the whole gap and beside both its edges.
    ReferenceMissing,
    /// The record holds too few stretches to measure the error of a fill of this length.
    TooFewTrials {
        /// The method whose error was to be measured.
        method: FillMethod,
        /// Artificial gaps that could be filled.
        found: usize,
        /// Artificial gaps needed.
        needed: usize,
    },
}

/// A gap that was filled.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FillSpan {
    /// Time of the usable sample before the gap, UTC seconds.
    pub from_s: f64,
    /// Time of the usable sample after the gap, UTC seconds.
    pub to_s: f64,
    /// How it was filled.
    pub method: FillMethod,
    /// Index of the neighbouring gauge, for the neighbour method.
    pub neighbour: Option<usize>,
    /// The measured error model of this fill.
    pub error: FillErrorModel,
}

/// A gap that was left open, and why.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RefusedGap {
    /// Time of the usable sample before the gap, UTC seconds.
    pub from_s: f64,
    /// Time of the usable sample after the gap, UTC seconds.
    pub to_s: f64,
    /// Why it was not filled.
    pub why: FillRefusal,
}

/// A series' fill marks, aligned with its samples when anything was filled.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct FillMarks {
    /// Per sample: whether it was filled (empty when nothing was).
    pub filled: Vec<bool>,
    /// Per sample: the standard uncertainty of the fill, metres (0 for observed samples; empty
    /// when nothing was filled).
    pub u_fill_m: Vec<f64>,
    /// The gaps filled, in time order.
    pub spans: Vec<FillSpan>,
    /// The gaps left open, in time order.
    pub refused: Vec<RefusedGap>,
}

impl FillMarks {
    /// Whether the interval from sample `i` to `i + 1` touches a filled sample.
    pub fn bracket_filled(&self, i: usize) -> bool {
        !self.filled.is_empty()
            && (self.filled.get(i).copied().unwrap_or(false)
                || self.filled.get(i + 1).copied().unwrap_or(false))
    }

    /// The filled gap holding `t_s`, when one does.
    pub fn span_at(&self, t_s: f64) -> Option<&FillSpan> {
        let k = self.spans.partition_point(|s| s.to_s < t_s);
        self.spans.get(k).filter(|s| s.from_s <= t_s)
    }

    /// The refused gap holding `t_s` (edges included), when one does.
    pub fn refused_at(&self, t_s: f64) -> Option<&RefusedGap> {
        let k = self.refused.partition_point(|s| s.to_s < t_s);
        self.refused.get(k).filter(|s| s.from_s <= t_s)
    }
}

/// Fills every gap of `series` (see the module documentation) from the first of `references`
/// that `choice` allows and that best matches the gap's edges, with samples every `step_s`.
/// Returns the new series (filled samples inserted, the flagged times inside filled gaps
/// dropped, spline coefficients left empty for the caller to rebuild) and its marks.
pub fn fill_series(
    series: &LevelSeries,
    step_s: f64,
    references: &[Reference<'_>],
    choice: MethodChoice,
    settings: &FillSettings,
) -> (LevelSeries, FillMarks) {
    let n = series.times_s.len();
    let unbridged = series.unbridged();
    let allowed: Vec<&Reference<'_>> = references
        .iter()
        .filter(|r| match choice {
            MethodChoice::Auto => true,
            MethodChoice::PredictionResidual => r.method() == FillMethod::PredictionResidual,
            MethodChoice::Neighbour => r.method() == FillMethod::Neighbour,
        })
        .collect();
    let mut out = LevelSeries {
        max_gap_s: series.max_gap_s,
        ..Default::default()
    };
    let mut marks = FillMarks::default();
    let mut filled = Vec::with_capacity(n);
    let mut u_fill = Vec::with_capacity(n);
    let mut fills_made = false;
    for i in 0..n {
        out.times_s.push(series.times_s[i]);
        out.heights_m.push(series.heights_m[i]);
        filled.push(false);
        u_fill.push(0.0);
        if i + 1 >= n || !unbridged[i] {
            continue;
        }
        let (t0, t1) = (series.times_s[i], series.times_s[i + 1]);
        let length_s = t1 - t0;
        let refuse = |why| RefusedGap {
            from_s: t0,
            to_s: t1,
            why,
        };
        if length_s > settings.max_fill_s {
            marks.refused.push(refuse(FillRefusal::TooLong {
                length_s,
                max_s: settings.max_fill_s,
            }));
            continue;
        }
        if allowed.is_empty() {
            marks.refused.push(refuse(FillRefusal::NoReference {
                wanted: match choice {
                    MethodChoice::PredictionResidual => Some(FillMethod::PredictionResidual),
                    MethodChoice::Neighbour => Some(FillMethod::Neighbour),
                    _ => None,
                },
            }));
            continue;
        }
        let grid: Vec<f64> = {
            let k = ((length_s / step_s).round() as usize).max(1);
            let dt = length_s / k as f64;
            (1..k).map(|j| t0 + j as f64 * dt).collect()
        };
        // Candidates with a value across the gap, best edge match first (prediction first on a
        // tie, as references are listed).
        let mut best: Option<(&Reference<'_>, EdgeFit, f64)> = None;
        for r in &allowed {
            let Some(fit) = edge_fit(series, &unbridged, i, i + 1, r, settings.edge_window_s)
            else {
                continue;
            };
            if grid.iter().any(|&t| r.at(t).is_none()) {
                continue;
            }
            if best.as_ref().is_none_or(|&(_, _, m)| fit.misfit_rms_m < m) {
                best = Some((r, fit, fit.misfit_rms_m));
            }
        }
        let Some((r, fit, _)) = best else {
            marks.refused.push(refuse(FillRefusal::ReferenceMissing));
            continue;
        };
        let Some(error) = measure_fill_error(series, &unbridged, length_s, r, settings) else {
            let probe = FillSettings {
                min_trials: 0,
                ..*settings
            };
            let found =
                measure_fill_error(series, &unbridged, length_s, r, &probe).map_or(0, |e| e.trials);
            marks.refused.push(refuse(FillRefusal::TooFewTrials {
                method: r.method(),
                found,
                needed: settings.min_trials,
            }));
            continue;
        };
        for &t in &grid {
            let v =
                fill_at(r, &fit, t0, t1, t).expect("the reference has a value at every grid time");
            out.times_s.push(t);
            out.heights_m.push(v);
            filled.push(true);
            u_fill.push(error.u_at_m((t - t0) / length_s));
        }
        fills_made = true;
        marks.spans.push(FillSpan {
            from_s: t0,
            to_s: t1,
            method: r.method(),
            neighbour: match r {
                Reference::Neighbour(nb) => Some(nb.gauge),
                Reference::Prediction(_) => None,
            },
            error,
        });
    }
    out.flagged_times_s = series
        .flagged_times_s
        .iter()
        .copied()
        .filter(|&f| marks.span_at(f).is_none())
        .collect();
    if fills_made {
        marks.filled = filled;
        marks.u_fill_m = u_fill;
    }
    (out, marks)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::harmonic::{analyse, AnalysisSettings};
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, Normal};

    const H: f64 = 3600.0;
    /// A semidiurnal tide: M2 and S2 at their true speeds (28.9841042 and 30 °/h, the field
    /// primer's check values), amplitudes and phases invented.
    fn tide(t_s: f64) -> f64 {
        let h = t_s / H;
        2.5 + 1.2 * (28.984_104_2 * h - 40.0_f64).to_radians().cos()
            + 0.4 * (30.0 * h - 70.0_f64).to_radians().cos()
    }

    /// A smooth surge: a bump of `peak_m` lasting about a day, centred on `at_s`.
    fn surge(t_s: f64, at_s: f64, peak_m: f64) -> f64 {
        peak_m * (-((t_s - at_s) / (8.0 * H)).powi(2)).exp()
    }

    fn series_of(times: &[f64], f: impl Fn(f64) -> f64, noise_m: f64, seed: u64) -> LevelSeries {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let nd = Normal::new(0.0, noise_m.max(1e-12)).expect("a positive sd");
        LevelSeries {
            times_s: times.to_vec(),
            heights_m: times.iter().map(|&t| f(t) + nd.sample(&mut rng)).collect(),
            max_gap_s: 1800.0,
            ..Default::default()
        }
    }

    fn constants_from(series: &LevelSeries) -> HarmonicConstants {
        analyse(
            &series.times_s,
            &series.heights_m,
            &AnalysisSettings::default(),
        )
        .expect("a 30-day record analyses")
        .constants()
    }

    fn settings(max_fill_h: f64) -> FillSettings {
        FillSettings {
            max_fill_s: max_fill_h * H,
            edge_window_s: 1800.0,
            min_trials: MIN_TRIALS,
        }
    }

    /// Cuts samples strictly between `a_s` and `b_s` out of a series.
    fn cut(s: &LevelSeries, a_s: f64, b_s: f64) -> LevelSeries {
        let keep: Vec<usize> = (0..s.times_s.len())
            .filter(|&k| !(s.times_s[k] > a_s && s.times_s[k] < b_s))
            .collect();
        LevelSeries {
            times_s: keep.iter().map(|&k| s.times_s[k]).collect(),
            heights_m: keep.iter().map(|&k| s.heights_m[k]).collect(),
            ..s.clone()
        }
    }

    /// Prediction plus residual against linear interpolation over a 6-hour gap on a 30-day
    /// 6-min record with a 0.5-m surge across the gap. Reference: linear interpolation over a
    /// gap of half a semidiurnal period misses a whole high or low water (error of the order of
    /// the amplitude, the field primer's §3 bound A(ωΔt)²/8 with Δt = 6 h: far beyond 1 m);
    /// the residual-corrected prediction only misses the surge's curvature across the gap
    /// (0.5 m · (1 − e^{−(3/8)²}) ≈ 0.07 m at most here, derived from the bump's formula). The
    /// figures are printed with `--nocapture`.
    #[test]
    fn prediction_with_residual_beats_linear_over_a_six_hour_gap() {
        let times: Vec<f64> = (0..30 * 240).map(|k| k as f64 * 360.0).collect();
        let mid = 20.0 * 24.0 * H;
        let truth = |t: f64| tide(t) + surge(t, mid, 0.5);
        let full = series_of(&times, truth, 0.01, 7);
        let k = constants_from(&full);
        let (a, b) = (mid - 3.0 * H, mid + 3.0 * H);
        let gappy = cut(&full, a, b);
        let refs = [Reference::Prediction(&k)];
        let (filled, marks) = fill_series(&gappy, 360.0, &refs, MethodChoice::Auto, &settings(7.0));
        assert_eq!(marks.spans.len(), 1, "{:?}", marks.refused);
        let (mut se_fill, mut se_lin, mut n) = (0.0, 0.0, 0.0);
        for (j, &t) in filled.times_s.iter().enumerate() {
            if t > a && t < b {
                assert!(marks.filled[j]);
                let lin = tide(a)
                    + surge(a, mid, 0.5)
                    + (tide(b) + surge(b, mid, 0.5) - tide(a) - surge(a, mid, 0.5)) * (t - a)
                        / (b - a);
                se_fill += (filled.heights_m[j] - truth(t)).powi(2);
                se_lin += (lin - truth(t)).powi(2);
                n += 1.0;
            }
        }
        let (rms_fill, rms_lin) = ((se_fill / n).sqrt(), (se_lin / n).sqrt());
        println!("6-h gap with a 0.5-m surge: prediction+residual RMS {rms_fill:.4} m, linear RMS {rms_lin:.4} m");
        assert!(rms_fill < 0.07, "{rms_fill}");
        assert!(rms_lin > 0.5, "{rms_lin}");
        assert!(rms_fill < rms_lin / 10.0);
    }

    /// The measured uncertainty covers the fill error at about 95 % with U = 2u: over many
    /// artificial 2-hour gaps on records with a random surge (a random walk) and noise, the share
    /// of filled samples whose error is within 2·u(f). Reference: for a normal error, ±1.96 σ
    /// holds 95 % (GUM, JCGM 100:2008, G.1); the band 90–99 % allows for the error model's own
    /// uncertainty from its few trials.
    #[test]
    fn the_measured_uncertainty_covers_the_fill_error() {
        let times: Vec<f64> = (0..30 * 240).map(|k| k as f64 * 360.0).collect();
        let (mut inside, mut total) = (0usize, 0usize);
        for seed in 0..12u64 {
            let mut rng = ChaCha8Rng::seed_from_u64(100 + seed);
            let step = Normal::new(0.0, 0.004).expect("a positive sd");
            let mut walk = 0.0;
            let surge_m: Vec<f64> = times
                .iter()
                .map(|_| {
                    walk = 0.995 * walk + step.sample(&mut rng);
                    walk
                })
                .collect();
            let truth: Vec<f64> = times
                .iter()
                .zip(&surge_m)
                .map(|(&t, s)| tide(t) + s)
                .collect();
            let full = series_of(&times, |t| truth[(t / 360.0).round() as usize], 0.008, seed);
            let k = constants_from(&full);
            for g in 0..6 {
                let a = (3.0 + 4.5 * g as f64) * 24.0 * H + seed as f64 * 5000.0;
                let b = a + 2.0 * H;
                let a = times[times.partition_point(|&x| x < a)];
                let b = times[times.partition_point(|&x| x < b)];
                let gappy = cut(&full, a, b);
                let refs = [Reference::Prediction(&k)];
                let (filled, marks) =
                    fill_series(&gappy, 360.0, &refs, MethodChoice::Auto, &settings(3.0));
                assert_eq!(marks.spans.len(), 1, "{:?}", marks.refused);
                for (j, &t) in filled.times_s.iter().enumerate() {
                    if marks.filled[j] {
                        let e = filled.heights_m[j] - truth[(t / 360.0).round() as usize];
                        total += 1;
                        if e.abs() <= 2.0 * marks.u_fill_m[j] {
                            inside += 1;
                        }
                    }
                }
            }
        }
        let share = inside as f64 / total as f64;
        println!(
            "coverage of U = 2u over {total} filled samples: {:.1} %",
            100.0 * share
        );
        assert!((0.90..=0.99).contains(&share), "{share}");
    }

    /// A gauge that is its neighbour lagged 20 min and scaled by 1.25 about its mean (the
    /// relation of a zone fed by both: Δt_a = 5, R_a = 0.8, Δt_b = 25, R_b = 1.0 gives lag
    /// (25 − 5) min and ratio 1.0/0.8 by `relation_from_zone`'s algebra, written out in its
    /// doc) is recovered across a 90-min gap to within the noise (3 × 0.005 m, the two records'
    /// noise combined with margin; hand reasoning).
    #[test]
    fn neighbour_recovers_a_lagged_scaled_gauge() {
        let (lag_s, ratio) = relation_from_zone(5.0, 0.8, 25.0, 1.0);
        assert_eq!(lag_s, 1200.0);
        assert_eq!(ratio, 1.25);
        let times: Vec<f64> = (0..2 * 24 * 60).map(|k| k as f64 * 60.0).collect();
        let other = series_of(&times, |t| tide(t) + surge(t, 30.0 * H, 0.3), 0.005, 1);
        let me_truth =
            |t: f64| 2.7 + 1.25 * (tide(t - 1200.0) + surge(t - 1200.0, 30.0 * H, 0.3) - 2.5);
        let me = series_of(&times, me_truth, 0.005, 2);
        let (a, b) = (26.0 * H, 27.5 * H);
        let gappy = cut(&me, a, b);
        let refs = [Reference::Neighbour(NeighbourRelation {
            gauge: 1,
            series: &other,
            lag_s,
            ratio,
            self_mean_m: 2.7,
            other_mean_m: 2.5,
        })];
        let (filled, marks) = fill_series(&gappy, 60.0, &refs, MethodChoice::Auto, &settings(3.0));
        assert_eq!(marks.spans.len(), 1, "{:?}", marks.refused);
        assert_eq!(marks.spans[0].method, FillMethod::Neighbour);
        let mut worst: f64 = 0.0;
        for (j, &t) in filled.times_s.iter().enumerate() {
            if marks.filled[j] {
                worst = worst.max((filled.heights_m[j] - me_truth(t)).abs());
            }
        }
        assert!(worst < 0.03, "{worst}");
        // The same from constants: M2 lag of 20 min is 20/60 h × 28.984 °/h ≈ 9.66°.
        let (lag2, ratio2) = relation_from_constants(1.5, 49.661, 1.2, 40.0, 28.984_104_2);
        assert!((lag2 - 1200.0).abs() < 1.0, "{lag2}");
        assert!((ratio2 - 1.25).abs() < 1e-12);
    }

    /// A gap longer than the longest fill stays open, saying so; so does one whose record is too
    /// short to measure the error (a 6-h gap in a 2-day record), and one with no reference.
    #[test]
    fn refusals_are_reported() {
        let times: Vec<f64> = (0..2 * 240).map(|k| k as f64 * 360.0).collect();
        let s = series_of(&times, tide, 0.01, 3);
        let k = HarmonicConstants {
            z0_m: 2.5,
            constituents: Vec::new(),
        };
        let gappy = cut(&s, 20.0 * H, 26.0 * H);
        let refs = [Reference::Prediction(&k)];
        let (out, marks) = fill_series(&gappy, 360.0, &refs, MethodChoice::Auto, &settings(4.0));
        assert!(marks.spans.is_empty() && marks.filled.is_empty());
        assert_eq!(out.times_s.len(), gappy.times_s.len());
        assert!(
            matches!(marks.refused[0].why, FillRefusal::TooLong { length_s, max_s } if length_s == 6.0 * H && max_s == 4.0 * H)
        );
        let (_, marks) = fill_series(&gappy, 360.0, &refs, MethodChoice::Auto, &settings(7.0));
        assert!(
            matches!(marks.refused[0].why, FillRefusal::TooFewTrials { needed: MIN_TRIALS, found, .. } if found < MIN_TRIALS)
        );
        let (_, marks) = fill_series(
            &gappy,
            360.0,
            &refs,
            MethodChoice::Neighbour,
            &settings(7.0),
        );
        assert!(matches!(
            marks.refused[0].why,
            FillRefusal::NoReference {
                wanted: Some(FillMethod::Neighbour)
            }
        ));
    }

    /// The shape fit recovers known parameters from exact squared errors (e² = a·4f(1−f) + c
    /// with a = 0.04, c = 0.0001: u_mid = 0.2, u_edge = 0.01; hand values).
    #[test]
    fn error_shape_fit_recovers_known_values() {
        let pairs: Vec<(f64, f64)> = (1..50)
            .map(|k| {
                let f = k as f64 / 50.0;
                (f, (0.04 * 4.0 * f * (1.0 - f) + 0.0001f64).sqrt())
            })
            .collect();
        let (m, e) = fit_error_shape(&pairs);
        assert!((m - 0.2).abs() < 1e-9 && (e - 0.01).abs() < 1e-9, "{m} {e}");
        let model = FillErrorModel {
            u_mid_m: m,
            u_edge_m: e,
            noise_m: 0.0,
            trials: 1,
            samples: 1,
        };
        assert!((model.u_at_m(0.5) - (0.04f64 + 0.0001).sqrt()).abs() < 1e-9);
        assert!((model.u_at_m(0.0) - 0.01).abs() < 1e-9);
    }
}
