//! The words of the core's reasons. The computation returns why something has no value or was
//! flagged as an enum with its numbers and times ([`NoLevel`], [`QcReason`],
//! [`CompareFinding`]); this module is the one place that turns them into the text the outputs
//! carry (`status_detail`, `qc_detail`, the QC summary's findings). Times are written with
//! [`utc_label`], the message form.

use std::fmt;

use super::timefmt::utc_label;
use crate::compute::compare::CompareFinding;
use crate::compute::gapfill::FillRefusal;
use crate::compute::qc::{QcReason, ShiftKind};
use crate::compute::series::NoLevel;

impl fmt::Display for NoLevel {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            NoLevel::EmptyRecord => write!(f, "record holds no usable sample"),
            NoLevel::BeforeRecord { by_s } => {
                write!(f, "{:.1} min before the record starts", by_s / 60.0)
            }
            NoLevel::AfterRecord { by_s } => {
                write!(f, "{:.1} min after the record ends", by_s / 60.0)
            }
            NoLevel::Flagged { at_s } => write!(
                f,
                "the gauge sample at {} was flagged by quality control and is not interpolated through",
                utc_label(*at_s)
            ),
            NoLevel::Gap { from_s, length_s } => write!(
                f,
                "inside a {:.1} min gap starting at {}",
                length_s / 60.0,
                utc_label(*from_s)
            ),
        }
    }
}

impl fmt::Display for FillRefusal {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FillRefusal::TooLong { length_s, max_s } => write!(
                f,
                "the gap of {:.1} min is longer than [gap_fill] max_fill_min = {} min",
                length_s / 60.0,
                crate::io::numfmt::round_to(max_s / 60.0, 3)
            ),
            FillRefusal::NoReference { wanted: Some(m) } => write!(
                f,
                "the gauge has no reference for {}",
                m.as_str()
            ),
            FillRefusal::NoReference { wanted: None } => write!(
                f,
                "the gauge has neither harmonic constants nor a neighbour related through the zoning or constants"
            ),
            FillRefusal::ReferenceMissing => write!(
                f,
                "no reference has a level across the whole gap and beside both its edges"
            ),
            FillRefusal::TooFewTrials {
                method,
                found,
                needed,
            } => write!(
                f,
                "the record holds {found} stretches where a gap this long can be cut out and filled by {} to measure the fill's error, fewer than the {needed} needed",
                method.as_str()
            ),
        }
    }
}

/// A QC reason with the record's line numbers, so that the other sample a reason names is
/// named by its line (`line 4`); without lines it is named by its place in the file
/// (`sample 3`). `QcReason`'s own `Display` is this without lines.
#[derive(Debug, Clone, Copy)]
pub struct QcDetail<'a> {
    /// The reason.
    pub reason: &'a QcReason,
    /// 1-based line of each sample in the record file (may be empty).
    pub lines: &'a [u64],
}

impl QcDetail<'_> {
    fn sample(&self, i: usize) -> String {
        match self.lines.get(i) {
            Some(l) => format!("line {l}"),
            None => format!("sample {}", i + 1),
        }
    }
}

impl fmt::Display for QcReason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        QcDetail {
            reason: self,
            lines: &[],
        }
        .fmt(f)
    }
}

impl fmt::Display for QcDetail<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self.reason {
            QcReason::DuplicateTime { t_s, kept } => write!(
                f,
                "time {} and its reading repeat {}: the repeated row is set aside",
                utc_label(t_s),
                self.sample(kept)
            ),
            QcReason::DistantDuplicate { t_s, other } => write!(
                f,
                "time {} and its reading are also those of {}, with other rows between: not a repeated row (a clock set back?): both are set aside",
                utc_label(t_s),
                self.sample(other)
            ),
            QcReason::ConflictingDuplicate {
                t_s,
                other,
                other_level_m,
            } => write!(
                f,
                "time {} is also that of {}, whose level differs ({other_level_m:.3} m): both are set aside",
                utc_label(t_s),
                self.sample(other)
            ),
            QcReason::EarlierThanPrevious { t_s, by_s, previous } => write!(
                f,
                "time {} is {:.1} min earlier than {} before it",
                utc_label(t_s),
                by_s / 60.0,
                self.sample(previous)
            ),
            QcReason::LaterThanNext { t_s, by_s, next } => write!(
                f,
                "time {} is {:.1} min later than {} after it",
                utc_label(t_s),
                by_s / 60.0,
                self.sample(next)
            ),
            QcReason::NotFinite { level_m } => write!(
                f,
                "the reading is not a finite number ({level_m})"
            ),
            QcReason::OutOfOrder { t_s } => write!(f, "time {} is out of order", utc_label(t_s)),
            QcReason::GapBefore {
                interval_s,
                nominal_step_s,
            } => write!(
                f,
                "{:.1} min since the previous sample ({:.1} × the {:.1} min step)",
                interval_s / 60.0,
                interval_s / nominal_step_s,
                nominal_step_s / 60.0
            ),
            QcReason::OutOfBand {
                level_m,
                band_min_m,
                band_max_m,
            } => write!(
                f,
                "{level_m:.3} m is outside the plausible band {band_min_m:.2} to {band_max_m:.2} m"
            ),
            QcReason::FlatLine {
                reading_m,
                repeats,
                duration_min,
                from_s,
            } => write!(
                f,
                "reading {reading_m:.3} m repeated {repeats} times over {duration_min:.0} min from {}",
                utc_label(from_s)
            ),
            QcReason::Spike {
                residual_m,
                robust_sigma_m,
                limit_m,
            } => write!(
                f,
                "{residual_m:+.3} m from the level predicted by its neighbours ({:.1} robust σ of {robust_sigma_m:.4} m; limit {limit_m:.3} m)",
                residual_m.abs() / robust_sigma_m.max(1e-12),
            ),
            QcReason::LevelShift {
                size_m,
                kind,
                window_min,
                limit_m,
                sigma_m,
            } => {
                let stats = format!(
                    "cubic plus step fitted over {window_min:.0} min each side; limit {limit_m:.3} m, robust σ {sigma_m:.4} m"
                );
                match kind {
                    ShiftKind::Offset { from_s, until_s } => write!(
                        f,
                        "offset of {size_m:+.3} m from {} until {} ({stats})",
                        utc_label(from_s),
                        utc_label(until_s)
                    ),
                    ShiftKind::Step {
                        before_s,
                        after_s,
                        sets_aside_after: true,
                    } => write!(
                        f,
                        "step of {size_m:+.3} m between {} and {}: the record after it is set aside until the level is confirmed ({stats})",
                        utc_label(before_s),
                        utc_label(after_s)
                    ),
                    ShiftKind::Step {
                        before_s,
                        after_s,
                        sets_aside_after: false,
                    } => write!(
                        f,
                        "step of {size_m:+.3} m between {} and {} ({stats})",
                        utc_label(before_s),
                        utc_label(after_s)
                    ),
                }
            }
            QcReason::Rate {
                change_m,
                interval_h,
                other_s,
                max_rate_m_per_h,
                allowance_m,
            } => write!(
                f,
                "{change_m:+.3} m in {:.1} min to/from {} ({:.2} m/h; limit {max_rate_m_per_h:.2} m/h + {allowance_m:.3} m)",
                interval_h * 60.0,
                utc_label(other_s),
                change_m.abs() / interval_h,
            ),
            QcReason::BoundaryShift {
                size_m,
                u_size_m,
                boundary_from_s,
                boundary_until_s,
                step_at_s,
                set_aside_from_s,
                limit_m,
                window_min,
            } => {
                write!(
                    f,
                    "step of {size_m:+.3} m ± {u_size_m:.3} m across the hole from {} to {}, fitted best at {}; ",
                    utc_label(boundary_from_s),
                    utc_label(boundary_until_s),
                    utc_label(step_at_s),
                )?;
                if set_aside_from_s < step_at_s {
                    write!(
                        f,
                        "it may start as early as {}, so the record is set aside from there ",
                        utc_label(set_aside_from_s)
                    )?;
                } else {
                    write!(f, "the record is set aside from it ")?;
                }
                write!(
                    f,
                    "(local tidal model fitted over {window_min:.0} min each side; limit {limit_m:.3} m)"
                )
            }
            QcReason::TimeLag {
                lag_min,
                from_s,
                until_s,
                rms_without_m,
                rms_with_m,
            } => {
                write!(
                    f,
                    "times {lag_min:+.0} min off against the record before {} (clock jump): ",
                    utc_label(from_s)
                )?;
                match until_s {
                    Some(u) => write!(f, "set aside until {}", utc_label(u))?,
                    None => write!(f, "set aside to the record's end")?,
                }
                write!(
                    f,
                    " (local tidal model residual {rms_without_m:.3} m RMS without the lag, {rms_with_m:.3} m with it)"
                )
            }
        }
    }
}

impl fmt::Display for CompareFinding {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            CompareFinding::Mean { mean_m, limit_m } => write!(
                f,
                "mean difference {mean_m:+.3} m exceeds ±{limit_m:.3} m: check the datum relation (zero_above_datum_m) of both gauges"
            ),
            CompareFinding::Drift {
                drift_m_per_day,
                limit_m_per_day,
            } => write!(
                f,
                "drift {drift_m_per_day:+.4} m/day exceeds ±{limit_m_per_day:.4} m/day: a sensor drifting or settling"
            ),
            CompareFinding::Lag {
                best_lag_min,
                std_at_best_lag_m,
                std_m,
            } => write!(
                f,
                "the two agree best with {best_lag_min:+.1} min more time corrector (σ {std_at_best_lag_m:.3} m instead of {std_m:.3} m): check both gauges' clocks and time zones, and the time corrector"
            ),
            CompareFinding::WindowDrift {
                drift,
                limit_m_per_day,
            } => write!(
                f,
                "drift of {:+.4} m/day ± {:.4} between {} and {} (limit {limit_m_per_day:.4} m/day over {:.1}-day windows): a drifting or settling sensor",
                drift.rate_m_per_day,
                drift.u_rate_m_per_day,
                utc_label(drift.from_s),
                utc_label(drift.until_s),
                (drift.until_s - drift.from_s) / 86400.0
            ),
            CompareFinding::Step(st) => write!(
                f,
                "step of {:+.3} m in the difference at {}: one of the gauges moved or was re-levelled",
                st.size_m,
                utc_label(st.at_s)
            ),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::compare::Step;

    // 2026-06-14T09:30:00Z = 1781429400 s (see io::timefmt's tests).
    const T0: f64 = 1_781_429_400.0;

    /// Each reason's words, written out by hand from its numbers.
    #[test]
    fn reasons_read_as_written() {
        assert_eq!(
            NoLevel::Gap {
                from_s: T0,
                length_s: 3600.0
            }
            .to_string(),
            "inside a 60.0 min gap starting at 2026-06-14T09:30:00Z"
        );
        assert_eq!(
            NoLevel::Flagged { at_s: T0 + 0.75 }.to_string(),
            "the gauge sample at 2026-06-14T09:30:00.750Z was flagged by quality control and is not interpolated through"
        );
        assert_eq!(
            NoLevel::BeforeRecord { by_s: 90.0 }.to_string(),
            "1.5 min before the record starts"
        );
        assert_eq!(
            QcReason::Spike {
                residual_m: 0.486,
                robust_sigma_m: 0.0109,
                limit_m: 0.065
            }
            .to_string(),
            // 0.486 / 0.0109 = 44.59
            "+0.486 m from the level predicted by its neighbours (44.6 robust σ of 0.0109 m; limit 0.065 m)"
        );
        assert_eq!(
            QcReason::LevelShift {
                size_m: 0.12,
                kind: ShiftKind::Step {
                    before_s: T0,
                    after_s: T0 + 360.0,
                    sets_aside_after: true
                },
                window_min: 120.0,
                limit_m: 0.066,
                sigma_m: 0.008
            }
            .to_string(),
            "step of +0.120 m between 2026-06-14T09:30:00Z and 2026-06-14T09:36:00Z: the record after it is set aside until the level is confirmed (cubic plus step fitted over 120 min each side; limit 0.066 m, robust σ 0.0080 m)"
        );
        assert_eq!(
            QcReason::Rate {
                change_m: -0.6,
                interval_h: 0.1,
                other_s: T0,
                max_rate_m_per_h: 3.0,
                allowance_m: 0.05
            }
            .to_string(),
            // 0.6 m in 6 min is 6 m/h.
            "-0.600 m in 6.0 min to/from 2026-06-14T09:30:00Z (6.00 m/h; limit 3.00 m/h + 0.050 m)"
        );
        assert_eq!(
            QcReason::TimeLag {
                lag_min: 60.0,
                from_s: T0,
                until_s: Some(T0 + 86_400.0),
                rms_without_m: 0.0212,
                rms_with_m: 0.0098
            }
            .to_string(),
            "times +60 min off against the record before 2026-06-14T09:30:00Z (clock jump): set aside until 2026-06-15T09:30:00Z (local tidal model residual 0.021 m RMS without the lag, 0.010 m with it)"
        );
        assert_eq!(
            QcReason::BoundaryShift {
                size_m: 0.15,
                u_size_m: 0.004,
                boundary_from_s: T0,
                boundary_until_s: T0 + 2940.0,
                step_at_s: T0 + 9060.0,
                set_aside_from_s: T0 + 8940.0,
                limit_m: 0.05,
                window_min: 360.0
            }
            .to_string(),
            "step of +0.150 m ± 0.004 m across the hole from 2026-06-14T09:30:00Z to 2026-06-14T10:19:00Z, fitted best at 2026-06-14T12:01:00Z; it may start as early as 2026-06-14T11:59:00Z, so the record is set aside from there (local tidal model fitted over 360 min each side; limit 0.050 m)"
        );
        assert_eq!(
            CompareFinding::WindowDrift {
                drift: crate::compute::compare::WindowDrift {
                    from_s: T0,
                    until_s: T0 + 4.0 * 86_400.0,
                    rate_m_per_day: 0.0112,
                    u_rate_m_per_day: 0.0008
                },
                limit_m_per_day: 0.005
            }
            .to_string(),
            "drift of +0.0112 m/day ± 0.0008 between 2026-06-14T09:30:00Z and 2026-06-18T09:30:00Z (limit 0.0050 m/day over 4.0-day windows): a drifting or settling sensor"
        );
        assert_eq!(
            CompareFinding::Step(Step {
                at_s: T0,
                size_m: 0.1
            })
            .to_string(),
            "step of +0.100 m in the difference at 2026-06-14T09:30:00Z: one of the gauges moved or was re-levelled"
        );
    }
}
