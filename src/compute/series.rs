//! Gauge water-level series on chart datum, and interpolation of a series in time.
//!
//! Owns: [`LevelSeries`] (times in UTC seconds, heights above chart datum in metres, strictly
//! increasing times) and the [`TimeInterpolation`] trait with its [`Linear`] method. The
//! maximum-gap rule lives here: a time inside a gap longer than the series' limit, or outside the
//! record, has no level. Nothing is ever extrapolated.

/// A gauge's water level above chart datum, sampled at strictly increasing UTC times.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct LevelSeries {
    /// Sample times, seconds since 1970-01-01T00:00:00Z, strictly increasing.
    pub times_s: Vec<f64>,
    /// Water level above chart datum at each sample, metres, positive up.
    pub heights_m: Vec<f64>,
    /// Longest interval between two samples that interpolation may bridge, seconds.
    pub max_gap_s: f64,
    /// Times of samples that quality control set aside (sorted, UTC seconds). They are not in
    /// `times_s`; interpolation never spans one of them.
    pub flagged_times_s: Vec<f64>,
    /// Second derivatives of the not-a-knot cubic spline at each sample, m/s², when this gauge is
    /// interpolated by spline ([`Configured`]); empty for linear interpolation.
    pub spline_m_per_s2: Vec<f64>,
    /// Which samples gap filling added, their uncertainty, and the gaps filled or left open
    /// (empty when the record was not filled).
    pub fill: super::gapfill::FillMarks,
}

/// Interpolated level and its rate of change at one instant.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LevelAt {
    /// Water level above chart datum, metres.
    pub height_m: f64,
    /// Rate of change of the level, metres per second (used by the timing term of the
    /// uncertainty budget).
    pub rate_m_per_s: f64,
    /// Index `i` of the samples bracketing the instant (`times_s[i] <= t <= times_s[i+1]`), so
    /// that a series on the same times can be interpolated without a second search.
    pub bracket: usize,
}

/// Why a series has no level at an instant (`io::text` words it).
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
pub enum NoLevel {
    /// The series holds no sample at all.
    EmptyRecord,
    /// The instant is before the first sample (seconds before it).
    BeforeRecord {
        /// How far before the first sample, seconds.
        by_s: f64,
    },
    /// The instant is after the last sample (seconds after it).
    AfterRecord {
        /// How far after the last sample, seconds.
        by_s: f64,
    },
    /// The samples around the instant enclose a sample that quality control set aside.
    Flagged {
        /// Time of the flagged sample, UTC seconds.
        at_s: f64,
    },
    /// The instant falls in a gap longer than the series' maximum gap.
    Gap {
        /// Time of the sample that opens the gap, UTC seconds.
        from_s: f64,
        /// Length of the gap, seconds.
        length_s: f64,
    },
}

/// A method of interpolating a [`LevelSeries`] in time. A new method is one more implementation.
pub trait TimeInterpolation: Send + Sync + std::fmt::Debug {
    /// The level and its rate at `t_s` (UTC seconds), or why there is none.
    fn level_at(&self, series: &LevelSeries, t_s: f64) -> Result<LevelAt, NoLevel>;
    /// A short name for reports.
    fn name(&self) -> &'static str;
}

/// Linear interpolation between the two samples that bracket the instant.
///
/// # Error bound
/// For a constituent of amplitude `A` and angular speed `ω` sampled every `Δt`, the worst error is
/// `A (ω Δt)² / 8`: about 3.2e-4·A for M2 at 6 min.
///
/// # References
/// Common practice; bound from the Taylor remainder of linear interpolation.
#[derive(Debug, Clone, Copy, Default)]
pub struct Linear;

impl LevelSeries {
    /// Index `i` such that `times_s[i] <= t_s < times_s[i+1]`, with the record's ends handled by
    /// the caller. Requires at least two samples and `times_s[0] <= t_s <= last`.
    fn bracket(&self, t_s: f64) -> usize {
        let n = self.times_s.len();
        // Records are nearly regular: guess from the mean spacing, then step to the bracket; fall
        // back to a binary search when the guess is far off.
        let (t0, tn) = (self.times_s[0], self.times_s[n - 1]);
        let guess = (((t_s - t0) / (tn - t0)) * (n - 1) as f64) as usize;
        let mut i = guess.min(n - 2);
        for _ in 0..4 {
            if self.times_s[i] > t_s && i > 0 {
                i -= 1;
            } else if self.times_s[i + 1] <= t_s && i + 2 < n {
                i += 1;
            } else {
                return i;
            }
        }
        let i = self.times_s.partition_point(|&x| x <= t_s);
        i.saturating_sub(1).min(n - 2)
    }

    /// Checks record ends and the gap rule; returns the bracketing index when usable.
    pub fn usable_bracket(&self, t_s: f64) -> Result<usize, NoLevel> {
        let n = self.times_s.len();
        if n == 0 {
            return Err(NoLevel::EmptyRecord);
        }
        let first = self.times_s[0];
        let last = self.times_s[n - 1];
        // The record spans its flagged samples too: before the earliest (after the latest) of
        // them there is no record at all, between it and the first (last) usable sample the
        // record is set aside.
        let start = self
            .flagged_times_s
            .first()
            .map_or(first, |&f| f.min(first));
        let end = self.flagged_times_s.last().map_or(last, |&f| f.max(last));
        if t_s < first {
            if t_s < start {
                return Err(NoLevel::BeforeRecord { by_s: start - t_s });
            }
            // Named: the flagged sample next to the first usable one (one exists, as the
            // record starts before `first`).
            let k = self.flagged_times_s.partition_point(|&f| f < first);
            let f = self.flagged_times_s[k - 1];
            return Err(NoLevel::Flagged { at_s: f });
        }
        if t_s > last {
            if t_s > end {
                return Err(NoLevel::AfterRecord { by_s: t_s - end });
            }
            let k = self.flagged_times_s.partition_point(|&f| f <= last);
            let f = self.flagged_times_s[k];
            return Err(NoLevel::Flagged { at_s: f });
        }
        if n == 1 {
            return Ok(0);
        }
        let i = self.bracket(t_s);
        let (t0, t1) = (self.times_s[i], self.times_s[i + 1]);
        let len = t1 - t0;
        if t_s != t0 && t_s != t1 {
            // Flagged samples first: a gap made by setting samples aside is their doing.
            if !self.flagged_times_s.is_empty() {
                let k = self.flagged_times_s.partition_point(|&f| f <= t0);
                if let Some(&f) = self.flagged_times_s.get(k) {
                    if f < t1 {
                        return Err(NoLevel::Flagged { at_s: f });
                    }
                }
            }
            if len > self.max_gap_s {
                return Err(NoLevel::Gap {
                    from_s: t0,
                    length_s: len,
                });
            }
        }
        Ok(i)
    }
}

impl LevelSeries {
    /// Linear interpolation of this series at `t_s` between samples `i` and `i + 1` (a bracket
    /// found on another series with the same times).
    pub fn linear_in_bracket(&self, i: usize, t_s: f64) -> f64 {
        if self.times_s.len() < 2 {
            return self.heights_m.first().copied().unwrap_or(0.0);
        }
        let (t0, t1) = (self.times_s[i], self.times_s[i + 1]);
        let (h0, h1) = (self.heights_m[i], self.heights_m[i + 1]);
        h0 + (h1 - h0) * (t_s - t0) / (t1 - t0)
    }
}

impl TimeInterpolation for Linear {
    fn level_at(&self, series: &LevelSeries, t_s: f64) -> Result<LevelAt, NoLevel> {
        let i = series.usable_bracket(t_s)?;
        if series.times_s.len() == 1 {
            return Ok(LevelAt {
                height_m: series.heights_m[0],
                rate_m_per_s: 0.0,
                bracket: 0,
            });
        }
        let (t0, t1) = (series.times_s[i], series.times_s[i + 1]);
        let (h0, h1) = (series.heights_m[i], series.heights_m[i + 1]);
        let rate = (h1 - h0) / (t1 - t0);
        Ok(LevelAt {
            height_m: if t_s == t1 {
                h1
            } else {
                h0 + rate * (t_s - t0)
            },
            rate_m_per_s: rate,
            bracket: i,
        })
    }

    fn name(&self) -> &'static str {
        "linear"
    }
}

/// Each gauge as configured: not-a-knot cubic spline when the series carries spline coefficients
/// (`spline_m_per_s2` not empty), otherwise [`Linear`]. The maximum-gap rule and the rule that no
/// flagged sample is interpolated through hold for both (the spline is built per unbroken segment).
#[derive(Debug, Clone, Copy, Default)]
pub struct Configured;

impl TimeInterpolation for Configured {
    fn level_at(&self, series: &LevelSeries, t_s: f64) -> Result<LevelAt, NoLevel> {
        if series.spline_m_per_s2.is_empty() || series.times_s.len() < 2 {
            return Linear.level_at(series, t_s);
        }
        let i = series.usable_bracket(t_s)?;
        if series.interval_unbridged(i) {
            // At a sample beside a gap or a flagged sample: the two ends' second derivatives
            // belong to different segments, so the cubic between them means nothing; the
            // sample's level and the chord's slope, as linear interpolation gives them.
            return Linear.level_at(series, t_s);
        }
        let (height_m, rate_m_per_s) = super::spline::spline_in_bracket(
            &series.times_s,
            &series.heights_m,
            &series.spline_m_per_s2,
            i,
            t_s,
        );
        Ok(LevelAt {
            height_m: if t_s == series.times_s[i + 1] {
                series.heights_m[i + 1]
            } else {
                height_m
            },
            rate_m_per_s,
            bracket: i,
        })
    }

    fn name(&self) -> &'static str {
        "per gauge: linear, or not-a-knot cubic spline for sparse records"
    }
}

impl LevelSeries {
    /// The standard uncertainty of gap filling at `t_s` between samples `i` and `i + 1`,
    /// metres: linear between the two samples' fill uncertainties (0 for an observed sample),
    /// 0 when nothing was filled.
    pub fn fill_u_at_m(&self, i: usize, t_s: f64) -> f64 {
        let u = &self.fill.u_fill_m;
        if u.is_empty() || i + 1 >= u.len() || u.len() != self.times_s.len() {
            return u.get(i).copied().unwrap_or(0.0);
        }
        let (t0, t1) = (self.times_s[i], self.times_s[i + 1]);
        let f = ((t_s - t0) / (t1 - t0)).clamp(0.0, 1.0);
        u[i] + (u[i + 1] - u[i]) * f
    }
}

impl LevelSeries {
    /// Which intervals must not be interpolated: longer than the maximum gap, or enclosing a
    /// flagged sample. `result[i]` is about the interval from sample `i` to `i + 1`.
    pub fn unbridged(&self) -> Vec<bool> {
        (0..self.times_s.len().saturating_sub(1))
            .map(|i| self.interval_unbridged(i))
            .collect()
    }

    /// Whether the interval from sample `i` to `i + 1` must not be interpolated (see
    /// [`LevelSeries::unbridged`]). Requires `i + 1 < times_s.len()`.
    pub fn interval_unbridged(&self, i: usize) -> bool {
        let (t0, t1) = (self.times_s[i], self.times_s[i + 1]);
        if t1 - t0 > self.max_gap_s {
            return true;
        }
        let k = self.flagged_times_s.partition_point(|&f| f <= t0);
        self.flagged_times_s.get(k).is_some_and(|&f| f < t1)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn series() -> LevelSeries {
        LevelSeries {
            times_s: vec![0.0, 360.0, 720.0, 4320.0],
            heights_m: vec![1.0, 1.6, 1.3, 2.0],
            max_gap_s: 1800.0,
            ..Default::default()
        }
    }

    #[test]
    fn linear_between_samples_and_exact_at_samples() {
        let s = series();
        let at = Linear.level_at(&s, 180.0).unwrap();
        assert_relative_eq!(at.height_m, 1.3, epsilon = 1e-12);
        assert_relative_eq!(at.rate_m_per_s, 0.6 / 360.0, epsilon = 1e-15);
        assert_relative_eq!(Linear.level_at(&s, 360.0).unwrap().height_m, 1.6);
        assert_relative_eq!(Linear.level_at(&s, 0.0).unwrap().height_m, 1.0);
        assert_relative_eq!(Linear.level_at(&s, 4320.0).unwrap().height_m, 2.0);
    }

    #[test]
    fn gap_longer_than_limit_is_not_bridged_but_its_ends_are_usable() {
        let s = series();
        match Linear.level_at(&s, 1000.0) {
            Err(NoLevel::Gap { from_s, length_s }) => {
                assert_eq!(from_s, 720.0);
                assert_eq!(length_s, 3600.0);
            }
            other => panic!("expected a gap, got {other:?}"),
        }
        assert_relative_eq!(Linear.level_at(&s, 720.0).unwrap().height_m, 1.3);
    }

    #[test]
    fn bracket_search_handles_irregular_records() {
        // Samples crowded at the start, then sparse: the guess from mean spacing is far off.
        let mut times: Vec<f64> = (0..100).map(|i| i as f64).collect();
        times.extend((1..20).map(|i| 100.0 + i as f64 * 1000.0));
        let s = LevelSeries {
            heights_m: times.clone(),
            times_s: times.clone(),
            max_gap_s: 1e9,
            ..Default::default()
        };
        for k in 0..times.len() - 1 {
            for frac in [0.0, 0.3, 0.999] {
                let t = times[k] + frac * (times[k + 1] - times[k]);
                assert_eq!(s.usable_bracket(t).unwrap(), k, "t = {t}");
                assert!((Linear.level_at(&s, t).unwrap().height_m - t).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn flagged_samples_are_not_interpolated_through() {
        let mut s = series();
        s.flagged_times_s = vec![500.0];
        assert_eq!(
            Linear.level_at(&s, 400.0),
            Err(NoLevel::Flagged { at_s: 500.0 })
        );
        // The samples either side stay usable at their own times, and other intervals work.
        assert_relative_eq!(Linear.level_at(&s, 360.0).unwrap().height_m, 1.6);
        assert_relative_eq!(Linear.level_at(&s, 720.0).unwrap().height_m, 1.3);
        assert_relative_eq!(Linear.level_at(&s, 180.0).unwrap().height_m, 1.3);
        assert_eq!(s.unbridged(), vec![false, true, true]);
    }

    /// Samples set aside at the record's ends: an instant between them and the usable samples
    /// is flagged, an instant beyond them is outside the record, measured from the record's
    /// own first (last) sample.
    #[test]
    fn beyond_the_flagged_ends_the_record_is_absent_not_flagged() {
        let mut s = series(); // usable samples 0 .. 4320 s
        s.flagged_times_s = vec![-720.0, -360.0, 4680.0];
        assert_eq!(
            Linear.level_at(&s, -500.0),
            Err(NoLevel::Flagged { at_s: -360.0 })
        );
        assert_eq!(
            Linear.level_at(&s, -780.0),
            Err(NoLevel::BeforeRecord { by_s: 60.0 })
        );
        assert_eq!(
            Linear.level_at(&s, 4500.0),
            Err(NoLevel::Flagged { at_s: 4680.0 })
        );
        assert_eq!(
            Linear.level_at(&s, 4700.0),
            Err(NoLevel::AfterRecord { by_s: 20.0 })
        );
    }

    /// A not-a-knot spline's second derivatives are not 0 at segment ends, so at the sample
    /// that opens a gap (whose bracket is the gap) the level and rate are the linear ones (the
    /// sample's level, the chord's slope), never a cubic across the gap; inside a segment the
    /// spline is used.
    #[test]
    fn spline_at_a_sample_beside_a_gap_is_the_linear_result() {
        let times: Vec<f64> = [
            0.0, 3600.0, 7200.0, 10800.0, 21600.0, 25200.0, 28800.0, 32400.0,
        ]
        .to_vec();
        let mut s = LevelSeries {
            heights_m: times.iter().map(|t| 2.0 + (t / 9000.0).sin()).collect(),
            times_s: times,
            max_gap_s: 3600.0,
            ..Default::default()
        };
        s.spline_m_per_s2 = crate::compute::spline::spline_second_derivatives(
            &s.times_s,
            &s.heights_m,
            &s.unbridged(),
            crate::compute::spline::SplineEnds::NotAKnot,
        );
        assert!(s.spline_m_per_s2[3] != 0.0 && s.spline_m_per_s2[4] != 0.0);
        // 10 800 s opens the gap: its bracket is the gap itself.
        assert_eq!(s.usable_bracket(10800.0), Ok(3));
        assert_eq!(
            Configured.level_at(&s, 10800.0),
            Linear.level_at(&s, 10800.0)
        );
        // 21 600 s closes it and brackets into its own segment: the spline's level and rate.
        let (h, r) = crate::compute::spline::spline_in_bracket(
            &s.times_s,
            &s.heights_m,
            &s.spline_m_per_s2,
            4,
            21600.0,
        );
        let at = Configured.level_at(&s, 21600.0).unwrap();
        assert_eq!((at.height_m, at.rate_m_per_s, at.bracket), (h, r, 4));
        let inside = 5400.0;
        assert_ne!(
            Configured.level_at(&s, inside).unwrap().height_m,
            Linear.level_at(&s, inside).unwrap().height_m
        );
    }

    #[test]
    fn never_extrapolates() {
        let s = series();
        assert_eq!(
            Linear.level_at(&s, -60.0),
            Err(NoLevel::BeforeRecord { by_s: 60.0 })
        );
        assert_eq!(
            Linear.level_at(&s, 4380.0),
            Err(NoLevel::AfterRecord { by_s: 60.0 })
        );
        let empty = LevelSeries {
            times_s: vec![],
            heights_m: vec![],
            max_gap_s: 60.0,
            ..Default::default()
        };
        assert_eq!(Linear.level_at(&empty, 0.0), Err(NoLevel::EmptyRecord));
    }
}

#[cfg(test)]
mod properties {
    use super::*;
    use proptest::prelude::*;

    fn series_strategy() -> impl Strategy<Value = LevelSeries> {
        prop::collection::vec((1.0f64..900.0, -3.0f64..8.0), 2..60).prop_map(|steps| {
            let mut t = 0.0;
            let mut times = Vec::new();
            let mut heights = Vec::new();
            for (dt, h) in steps {
                t += dt;
                times.push(t);
                heights.push(h);
            }
            LevelSeries {
                times_s: times,
                heights_m: heights,
                max_gap_s: 600.0,
                ..Default::default()
            }
        })
    }

    proptest! {
        /// Linear interpolation stays within the two bracketing samples, and returns each
        /// sample's reading at its own time.
        #[test]
        fn linear_stays_within_the_bracketing_samples(s in series_strategy(), frac in 0.0f64..1.0) {
            let t = s.times_s[0] + frac * (s.times_s[s.times_s.len() - 1] - s.times_s[0]);
            if let Ok(at) = Linear.level_at(&s, t) {
                let i = at.bracket;
                let (a, b) = (s.heights_m[i], s.heights_m[i + 1]);
                prop_assert!(at.height_m >= a.min(b) - 1e-12 && at.height_m <= a.max(b) + 1e-12);
                prop_assert!(s.times_s[i] <= t && t <= s.times_s[i + 1]);
            }
            for (k, &tk) in s.times_s.iter().enumerate() {
                prop_assert_eq!(Linear.level_at(&s, tk).unwrap().height_m, s.heights_m[k]);
            }
        }
    }
}
