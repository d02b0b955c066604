//! Gauge-record quality control: a flag per sample, each with its reason.
//!
//! Owns: [`QcFlag`], [`QcFlags`], [`QcThresholds`] (documented defaults), [`run_qc`].
//!
//! Samples are never deleted: each gets a set of flags. Flags other than [`QcFlag::GapBefore`]
//! mark the sample unusable; the reducer does not interpolate through an unusable sample (see
//! [`crate::compute::series::LevelSeries::flagged_times_s`]).
//!
//! The tests, run in this order on the samples still clean:
//!
//! 1. **Time order** — the longest run of strictly increasing times is kept; every other sample
//!    is `time_order` (out of order) or `duplicate_time` (its time equals a kept sample's). A
//!    duplicate with the kept copy's reading is a repeated row and only the later copy is set
//!    aside; one with a different reading is a conflict no rule settles, and both copies are
//!    set aside ([`QcReason::ConflictingDuplicate`]; the loader refuses such a record unless the
//!    project chooses this). Later tests see only samples in increasing time.
//! 2. **Plausible band** — a reading that is not a finite number, or a level outside
//!    `[band_min_m, band_max_m]` above chart datum, is `out_of_band`.
//! 3. **Flat line** — the same reading repeated over at least `flat_min_samples` samples and
//!    `flat_min_duration_min` (a stuck sensor). The first reading of the run is kept. With the
//!    rule left at its defaults, a run that a quadratic fitted to the record on both sides of it
//!    explains as a stand at a turning point is excused.
//! 4. **Spike** — the sample is predicted from each side by a least-squares line through the
//!    neighbours within `spike_window_min / 2` (at least 2 samples); its residual is the smaller
//!    of the two. A spike is one whose residual exceeds `spike_k` robust standard deviations
//!    (1.4826 × the median absolute residual over the record) and `spike_min_m`. Taking the
//!    smaller side keeps steps, gap edges and the neighbours of a spike from raising alarms.
//! 5. **Boundary tests** — at each hole (longer than `gap_factor` steps and 15 min, at most
//!    `boundary_window_min`) and each junction with samples set aside for their time in between,
//!    a local tidal model (mean, slope, an M2-speed sinusoid and its slow modulation, K1- and
//!    M4-speed sinusoids) is fitted to both sides. `time_lag`: the run after the boundary fits
//!    with its times moved back by the hole's own length (a clock jump) clearly better than
//!    without, and about as well as with the best step; it is set aside up to the boundary with
//!    the opposite lag or the record's end. Then `level_shift` across the hole: the model's step
//!    at the best junction within `shift_window_min` of the hole exceeds `boundary_shift_k`
//!    standard errors and `shift_min_m`; the record is set aside from the earliest junction whose
//!    fit is as good within 4 σ (a step that cannot be dated is never let through).
//! 6. **Level shift** — at each junction between two samples, a cubic in time plus a step is
//!    fitted by least squares to the `shift_window_min` of samples on each side; the step `J` is
//!    the statistic. A junction whose `|J|` exceeds `shift_k` robust standard deviations of `J`
//!    over the record and `shift_min_m`, and is the largest within a window, flags the first
//!    sample after it. The cubic follows the tide; what it leaves is of fourth order and nearly
//!    symmetric about the junction, so it hardly enters `J`.
//! 7. **Rate** — between consecutive clean samples, `|Δh| > max_rate · Δt + rate_allowance_m`;
//!    the one of the pair with the larger spike residual is flagged. Unless set, `max_rate` is
//!    taken from the record: [`RATE_RECORD_FACTOR`] × its 99th-percentile half-hour rate, at
//!    least [`RATE_FLOOR_M_PER_H`]. The limits used are in [`QcResult::limits`].
//! 8. **Gap** — an interval longer than `gap_factor` × the record's nominal step (median interval)
//!    flags the sample after it as `gap_before`; informational, the sample stays usable (the
//!    reducer's maximum-gap rule decides what is bridged).
//!
//! # References
//! The fault types and the flag-rather-than-delete rule are common practice for tide-gauge data
//! (field primer §3). The robust scale 1.4826·MAD is the consistent estimator of σ for Gaussian
//! data (Hampel 1974; from memory). Default thresholds are from memory and common practice; each is
//! documented on [`QcThresholds`] and settable in the project file.

/// One reason a sample is suspect.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
#[non_exhaustive]
pub enum QcFlag {
    /// The time is earlier than an earlier sample's.
    TimeOrder,
    /// The time equals an earlier sample's.
    DuplicateTime,
    /// The level is outside the plausible band.
    OutOfBand,
    /// The reading repeats for too long (stuck sensor).
    FlatLine,
    /// Far from the level its neighbours predict.
    Spike,
    /// The level changes faster than the tide can.
    Rate,
    /// A step in the level (the first sample after it).
    LevelShift,
    /// A run whose times are shifted against the record around it (a logger clock jump).
    TimeLag,
    /// A gap longer than the threshold precedes this sample (informational).
    GapBefore,
}

/// Number of [`QcFlag`] kinds.
pub const N_FLAGS: usize = 9;

impl QcFlag {
    /// All flags, in report order.
    pub const ALL: [QcFlag; N_FLAGS] = [
        QcFlag::TimeOrder,
        QcFlag::DuplicateTime,
        QcFlag::OutOfBand,
        QcFlag::FlatLine,
        QcFlag::Spike,
        QcFlag::Rate,
        QcFlag::LevelShift,
        QcFlag::TimeLag,
        QcFlag::GapBefore,
    ];

    /// The word written in the `qc_flags` column.
    pub fn as_str(self) -> &'static str {
        match self {
            QcFlag::TimeOrder => "time_order",
            QcFlag::DuplicateTime => "duplicate_time",
            QcFlag::OutOfBand => "out_of_band",
            QcFlag::FlatLine => "flat_line",
            QcFlag::Spike => "spike",
            QcFlag::Rate => "rate",
            QcFlag::LevelShift => "level_shift",
            QcFlag::TimeLag => "time_lag",
            QcFlag::GapBefore => "gap_before",
        }
    }

    /// One line saying what the flag means.
    pub fn meaning(self) -> &'static str {
        match self {
            QcFlag::TimeOrder => "time earlier than a previous sample's",
            QcFlag::DuplicateTime => "time equal to another sample's",
            QcFlag::OutOfBand => "level outside the plausible band",
            QcFlag::FlatLine => "same reading repeated too long (stuck sensor)",
            QcFlag::Spike => "far from the level its neighbours predict",
            QcFlag::Rate => "level changes faster than the maximum rate",
            QcFlag::LevelShift => "step in the level (first sample after it)",
            QcFlag::TimeLag => "times shifted against the record around it (clock jump)",
            QcFlag::GapBefore => "gap longer than the threshold before this sample",
        }
    }

    /// Bit in a [`QcFlags`] set.
    pub fn bit(self) -> u16 {
        1 << (self as u16)
    }

    /// Whether the flag makes the sample unusable.
    pub fn excludes(self) -> bool {
        !matches!(self, QcFlag::GapBefore)
    }

    /// Whether the flag concerns the sample's time rather than its level: such samples are not
    /// on the record's timeline, so they do not block interpolation between their neighbours.
    /// [`QcFlag::TimeLag`] is not one of them: its samples cover a stretch of the timeline whose
    /// true level is not in the record, so they block interpolation like a level flag.
    pub fn is_timing(self) -> bool {
        matches!(self, QcFlag::TimeOrder | QcFlag::DuplicateTime)
    }

    /// Parses a flag word.
    pub fn parse(s: &str) -> Option<QcFlag> {
        QcFlag::ALL.into_iter().find(|f| f.as_str() == s)
    }
}

/// A set of [`QcFlag`]s.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct QcFlags(pub u16);

impl QcFlags {
    /// Whether `f` is set.
    pub fn contains(self, f: QcFlag) -> bool {
        self.0 & f.bit() != 0
    }
    /// Sets `f`.
    pub fn insert(&mut self, f: QcFlag) {
        self.0 |= f.bit();
    }
    /// Whether no flag that excludes the sample is set.
    pub fn usable(self) -> bool {
        QcFlag::ALL
            .iter()
            .all(|f| !f.excludes() || !self.contains(*f))
    }
    /// Whether a level flag (not a timing flag) excludes the sample.
    pub fn blocks_interpolation(self) -> bool {
        QcFlag::ALL
            .iter()
            .any(|f| f.excludes() && !f.is_timing() && self.contains(*f))
    }
    /// The flags set, in report order.
    pub fn iter(self) -> impl Iterator<Item = QcFlag> {
        QcFlag::ALL.into_iter().filter(move |f| self.contains(*f))
    }
    /// `spike;rate`, or empty.
    pub fn label(self) -> String {
        self.iter()
            .map(|f| f.as_str())
            .collect::<Vec<_>>()
            .join(";")
    }
}

/// QC thresholds. Defaults are from memory / common practice, as noted on each.
#[derive(Debug, Clone, PartialEq)]
pub struct QcThresholds {
    /// An interval longer than this many nominal steps is a gap (default 1.5; the field primer
    /// gives 1.5–2×, common practice).
    pub gap_factor: f64,
    /// Window for the spike test, minutes: half of it on each side (default 30; at least 2
    /// samples each side are used).
    pub spike_window_min: f64,
    /// Spike threshold in robust standard deviations (default 6; from memory — 3 to 6 is usual,
    /// 6 keeps false alarms below one per year of 1-minute Gaussian noise).
    pub spike_k: f64,
    /// Smallest deviation from the predicted level called a spike, metres (default 0.05).
    pub spike_min_m: f64,
    /// Fastest plausible rate of change of the level, metres per hour. `None` (the default):
    /// derived from the record, [`RATE_RECORD_FACTOR`] × its own fast rate (the 99th percentile
    /// of |Δh/Δt| over [`RATE_BASELINE_MIN`] among the samples the earlier tests left clean),
    /// and never below [`RATE_FLOOR_M_PER_H`]; see [`QcLimits`].
    pub max_rate_m_per_h: Option<f64>,
    /// Allowance for noise in the rate test, metres (default 0.05).
    pub rate_allowance_m: f64,
    /// Fewest repeated readings that make a flat line (`None`: [`FLAT_MIN_SAMPLES`], 5).
    pub flat_min_samples: Option<usize>,
    /// Shortest duration of repeated readings that makes a flat line, minutes (`None`:
    /// [`FLAT_MIN_DURATION_MIN`], 60 min: near slack water a 1 cm-resolution record can repeat
    /// for tens of minutes; common practice). When neither this nor `flat_min_samples` is set, a
    /// run that the record's own tide explains as a stand at a turning point is excused (see
    /// [`QcLimits::stands_excused`]); when either is set, the rule is exactly as set.
    pub flat_min_duration_min: Option<f64>,
    /// Window on each side of a junction for the level-shift fit, minutes (default 120; at least
    /// 8 samples are used). Longer windows average more noise but let more of the tide into the
    /// statistic: on a 6-min record with 1 cm noise the step statistic's robust σ is 12 mm at
    /// 60 min, 8 mm at 120 min (tide leakage 1 and 2.5 mm), 11 mm at 180 min (leakage 15 mm).
    pub shift_window_min: f64,
    /// Level-shift threshold in robust standard deviations of the step statistic (default 8).
    pub shift_k: f64,
    /// Smallest step called a level shift, metres (default 0.05).
    pub shift_min_m: f64,
    /// A level shift sets aside the record after it (until a step back, or the next step, or the
    /// record's end) rather than only its first sample (default true: the gauge's datum there is
    /// in doubt until re-levelled; common practice).
    pub shift_sets_aside_after: bool,
    /// Lowest plausible level above chart datum, metres (the loader's default is the gauge's mean
    /// level − 10 m: no tide plus surge reaches 10 m from mean level; from memory).
    pub band_min_m: f64,
    /// Highest plausible level above chart datum, metres (default mean level + 10 m).
    pub band_max_m: f64,
    /// Window on each side of a boundary (a hole in the record or a place where the time-order
    /// test took samples out) for the local tidal model of the boundary tests, minutes (default
    /// 360: half a day in all, one semidiurnal cycle, enough to pin the harmonics' phases).
    pub boundary_window_min: f64,
    /// Step across a boundary: threshold in standard errors of the fitted step (default 6; the
    /// floor `shift_min_m` applies too).
    pub boundary_shift_k: f64,
    /// Smallest lag of a run against the record before it that is a timing fault, minutes
    /// (default 10: below it a lag hardly changes a reduced depth; from memory).
    pub lag_min_min: f64,
    /// A lag is accepted when the fit's residual sum of squares falls by more than `lag_k²`
    /// times the residual variance (a likelihood-ratio test with a wide margin; default 10).
    pub lag_k: f64,
}

impl Default for QcThresholds {
    fn default() -> Self {
        QcThresholds {
            gap_factor: 1.5,
            spike_window_min: 30.0,
            spike_k: 6.0,
            spike_min_m: 0.05,
            max_rate_m_per_h: None,
            rate_allowance_m: 0.05,
            flat_min_samples: None,
            flat_min_duration_min: None,
            shift_window_min: 120.0,
            shift_k: 8.0,
            shift_min_m: 0.05,
            shift_sets_aside_after: true,
            band_min_m: f64::NEG_INFINITY,
            band_max_m: f64::INFINITY,
            boundary_window_min: 360.0,
            boundary_shift_k: 6.0,
            lag_min_min: 10.0,
            lag_k: 4.0,
        }
    }
}

/// Least rate limit when `max_rate_m_per_h` is not set, metres per hour: about the peak rate of
/// a semidiurnal tide of 12 m range (A·ω with A = 6 m, ω = 0.506 rad/h is 3.0 m/h; from memory).
pub const RATE_FLOOR_M_PER_H: f64 = 3.0;

/// The derived rate limit is this many times the record's own fast rate (common practice to
/// leave a wide margin; chosen so that a surge or a steeper flood than any in the record does
/// not pass for a fault: the record's 99th percentile is within a few per cent of its peak for a
/// tide, and shallow-water distortion is already in it).
pub const RATE_RECORD_FACTOR: f64 = 1.5;

/// Baseline of the record's own rate, minutes: differences over about half an hour average the
/// readings' noise (2 cm noise adds 0.06 m/h) while a semidiurnal tide's peak rate is kept
/// within 1 % (sin(ωΔt/2)/(ωΔt/2) = 0.997 for M2).
pub const RATE_BASELINE_MIN: f64 = 30.0;

/// Fewest baselines from which the record's own rate is taken; below, the floor is used.
pub const RATE_MIN_BASELINES: usize = 50;

/// Default of `flat_min_samples`.
pub const FLAT_MIN_SAMPLES: usize = 5;

/// Default of `flat_min_duration_min`, minutes.
pub const FLAT_MIN_DURATION_MIN: f64 = 60.0;

/// Where a limit used on a record came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum LimitSource {
    /// Set in the thresholds (the project's `[qc]` table).
    Set,
    /// The documented default (for the rate, the floor: the record's own rate × the factor is
    /// below it, or the record is too short to give one).
    Default,
    /// Derived from the record itself.
    Record,
}

impl LimitSource {
    /// The word written in the QC summary.
    pub fn as_str(self) -> &'static str {
        match self {
            LimitSource::Set => "project",
            LimitSource::Default => "default",
            LimitSource::Record => "record",
        }
    }
}

/// The rate and flat-line limits used on one record, and where each came from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct QcLimits {
    /// Rate limit used, metres per hour.
    pub max_rate_m_per_h: f64,
    /// Where it came from.
    pub max_rate_source: LimitSource,
    /// The record's own fast rate (99th percentile of |Δh/Δt| over [`RATE_BASELINE_MIN`]),
    /// metres per hour; `None` when the limit was set or the record gives too few baselines.
    pub record_fast_rate_m_per_h: Option<f64>,
    /// Fewest repeated readings that make a flat line.
    pub flat_min_samples: usize,
    /// Shortest flat line, minutes.
    pub flat_min_duration_min: f64,
    /// Where the flat-line rule came from ([`LimitSource::Set`] when either key is set).
    pub flat_source: LimitSource,
    /// Whether a run of repeated readings that the record's tide explains as a stand at a
    /// turning point is excused: a quadratic fitted to the clean samples on both sides of the
    /// run stays, over the whole run, within one reading step plus 3 of its standard errors of
    /// the repeated reading. True unless the flat-line rule was set.
    pub stands_excused: bool,
    /// Resolution of the readings (the 0.1th percentile of the non-zero differences between
    /// consecutive clean readings), metres.
    pub reading_resolution_m: f64,
    /// Runs of repeated readings long enough to be flat lines that were excused as stands.
    pub stands: usize,
}

/// Why one sample was flagged: the flag and the evidence behind it.
#[derive(Debug, Clone, PartialEq)]
pub struct QcNote {
    /// Sample index (file order).
    pub sample: usize,
    /// The flag.
    pub flag: QcFlag,
    /// The evidence, with its numbers; `io::text` words it ("+0.412 m from the level predicted
    /// by its neighbours …").
    pub reason: QcReason,
}

/// The evidence for one flag, as numbers. Times are UTC seconds, levels metres.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum QcReason {
    /// `duplicate_time`: the time and the reading equal a kept sample's (a repeated row: the
    /// kept copy carries the same level, so nothing is lost).
    DuplicateTime {
        /// The sample's time.
        t_s: f64,
        /// The kept sample with the same time and reading (index, file order).
        kept: usize,
    },
    /// `duplicate_time`: the time and the reading equal another sample's, but the two are not
    /// neighbours in the file (other rows lie between them): not a repeated row but a time
    /// written again later, as when a logger's clock is set back, whose equal reading is a
    /// coincidence. Both copies are set aside.
    DistantDuplicate {
        /// The sample's time.
        t_s: f64,
        /// The other sample with this time and reading (index, file order).
        other: usize,
    },
    /// `duplicate_time`: the time equals another sample's but the reading differs. No rule
    /// can tell which is right, so both copies are set aside.
    ConflictingDuplicate {
        /// The sample's time.
        t_s: f64,
        /// The other sample with this time (index, file order).
        other: usize,
        /// The other sample's level, metres.
        other_level_m: f64,
    },
    /// `time_order`: the time is earlier than the kept sample before it.
    EarlierThanPrevious {
        /// The sample's time.
        t_s: f64,
        /// How much earlier, seconds.
        by_s: f64,
        /// The kept sample before it in the file (index, file order), which need not be the
        /// row just above it.
        previous: usize,
    },
    /// `time_order`: the time is later than the kept sample after it.
    LaterThanNext {
        /// The sample's time.
        t_s: f64,
        /// How much later, seconds.
        by_s: f64,
        /// The kept sample after it in the file (index, file order).
        next: usize,
    },
    /// `time_order`: out of order otherwise.
    OutOfOrder {
        /// The sample's time.
        t_s: f64,
    },
    /// `gap_before`: a long interval before the sample.
    GapBefore {
        /// The interval, seconds.
        interval_s: f64,
        /// The record's nominal step, seconds.
        nominal_step_s: f64,
    },
    /// `out_of_band`: the reading is not a finite number (`NaN`, `inf` in the file).
    NotFinite {
        /// The value as read (NaN or ±infinity).
        level_m: f64,
    },
    /// `out_of_band`: the level is outside the plausible band.
    OutOfBand {
        /// The level, metres.
        level_m: f64,
        /// The band's lower end, metres.
        band_min_m: f64,
        /// The band's upper end, metres.
        band_max_m: f64,
    },
    /// `flat_line`: the reading repeats.
    FlatLine {
        /// The repeated reading, metres.
        reading_m: f64,
        /// How many times it is read.
        repeats: usize,
        /// Over how long, minutes.
        duration_min: f64,
        /// Time of the run's first reading.
        from_s: f64,
    },
    /// `spike`: far from the level its neighbours predict.
    Spike {
        /// The residual, metres.
        residual_m: f64,
        /// The record's robust σ of the residual, metres.
        robust_sigma_m: f64,
        /// The limit, metres.
        limit_m: f64,
    },
    /// `level_shift`: a step in the level.
    LevelShift {
        /// The step, metres (after − before).
        size_m: f64,
        /// What was found and what is set aside.
        kind: ShiftKind,
        /// The fit's window each side, minutes.
        window_min: f64,
        /// The limit, metres.
        limit_m: f64,
        /// The robust σ of the step statistic, metres.
        sigma_m: f64,
    },
    /// `level_shift`: a step across a boundary (a hole in the record), found by the local tidal
    /// model fitted on both sides.
    BoundaryShift {
        /// The fitted step, metres (after − before).
        size_m: f64,
        /// Its standard error, metres.
        u_size_m: f64,
        /// Time of the last sample before the boundary.
        boundary_from_s: f64,
        /// Time of the first sample after the boundary.
        boundary_until_s: f64,
        /// Time of the first sample after the step as fitted best.
        step_at_s: f64,
        /// Time of the first sample set aside: earlier than `step_at_s` when the fit cannot tell
        /// where the step starts.
        set_aside_from_s: f64,
        /// The limit, metres.
        limit_m: f64,
        /// The model's window each side, minutes.
        window_min: f64,
    },
    /// `time_lag`: the run after a boundary is shifted in time against the run before it.
    TimeLag {
        /// The lag, minutes: the run's times are this much later than the tide they record.
        lag_min: f64,
        /// Time of the first sample of the run.
        from_s: f64,
        /// Time of the first sample after the run (None: to the record's end).
        until_s: Option<f64>,
        /// RMS residual of the local tidal model without the lag, metres.
        rms_without_m: f64,
        /// RMS residual with it, metres.
        rms_with_m: f64,
    },
    /// `rate`: the level changes faster than allowed.
    Rate {
        /// The change, metres.
        change_m: f64,
        /// Over how long, hours.
        interval_h: f64,
        /// Time of the other sample of the pair.
        other_s: f64,
        /// The rate limit, metres per hour.
        max_rate_m_per_h: f64,
        /// The noise allowance, metres.
        allowance_m: f64,
    },
}

/// What a level shift is, for its [`QcReason::LevelShift`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ShiftKind {
    /// A temporary offset: a step and a step back.
    Offset {
        /// Time of the first offset sample.
        from_s: f64,
        /// Time of the first sample after the offset.
        until_s: f64,
    },
    /// A step with nothing after it confirmed.
    Step {
        /// Time of the last sample before the step.
        before_s: f64,
        /// Time of the first sample after it.
        after_s: f64,
        /// Whether the record after it is set aside.
        sets_aside_after: bool,
    },
}

/// QC of one record.
#[derive(Debug, Clone, PartialEq)]
pub struct QcResult {
    /// Flags per sample, file order.
    pub flags: Vec<QcFlags>,
    /// One note per (sample, flag), in sample order.
    pub notes: Vec<QcNote>,
    /// Median interval between consecutive samples in time order, seconds (0 with < 2 samples).
    pub nominal_step_s: f64,
    /// Robust standard deviation of the spike test's residual, metres.
    pub robust_sigma_m: f64,
    /// Noise of the readings (robust, from second differences of consecutive clean samples),
    /// metres.
    pub noise_sigma_m: f64,
    /// Samples per flag, [`QcFlag::ALL`] order.
    pub counts: [usize; N_FLAGS],
    /// The rate and flat-line limits used, and where each came from.
    pub limits: QcLimits,
}

impl QcResult {
    /// Samples flagged `f`.
    pub fn count(&self, f: QcFlag) -> usize {
        self.counts[f as usize]
    }
    /// Samples that may be used.
    pub fn usable_count(&self) -> usize {
        self.flags.iter().filter(|f| f.usable()).count()
    }
    /// The notes of sample `i`.
    pub fn notes_of(&self, i: usize) -> &[QcNote] {
        let a = self.notes.partition_point(|n| n.sample < i);
        let b = self.notes.partition_point(|n| n.sample <= i);
        &self.notes[a..b]
    }
    /// Samples flagged `f`, in file order.
    pub fn flagged(&self, f: QcFlag) -> Vec<usize> {
        (0..self.flags.len())
            .filter(|&i| self.flags[i].contains(f))
            .collect()
    }
}

struct Flagger {
    flags: Vec<QcFlags>,
    notes: Vec<QcNote>,
}

impl Flagger {
    fn flag(&mut self, i: usize, f: QcFlag, reason: QcReason) {
        if !self.flags[i].contains(f) {
            self.flags[i].insert(f);
            self.notes.push(QcNote {
                sample: i,
                flag: f,
                reason,
            });
        }
    }
}

fn median_of(buf: &mut [f64]) -> f64 {
    let n = buf.len();
    let mid = n / 2;
    let (_, m, _) = buf.select_nth_unstable_by(mid, f64::total_cmp);
    let m = *m;
    if n % 2 == 1 {
        m
    } else {
        let lower = buf[..mid].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lower + m)
    }
}

/// 1.4826 × median(|x|): the robust standard deviation of values centred on zero.
fn robust_sigma(values: impl Iterator<Item = f64>) -> f64 {
    let mut a: Vec<f64> = values.map(f64::abs).collect();
    if a.is_empty() {
        return 0.0;
    }
    1.4826 * median_of(&mut a)
}

/// Half-width in samples of a window of `window_min` minutes for a record stepping `step_s`.
fn half_width(window_min: f64, step_s: f64, at_least: usize) -> usize {
    if step_s <= 0.0 {
        return at_least;
    }
    ((window_min * 30.0 / step_s).round() as usize).max(at_least)
}

/// Samples on each side of a junction used by [`step_statistic`] for a window of `window_min`
/// minutes on a record stepping `step_s` (at least 8).
pub fn step_window_samples(window_min: f64, step_s: f64) -> usize {
    (half_width(window_min, step_s, 4) * 2).max(8)
}

/// Residual of each sample in `idx` from its neighbours in `idx`.
///
/// Two predictions of the sample are made, each by extrapolating a least-squares line through
/// up to `hw` neighbours on one side (a side stops at a hole longer than `max_step_s`); the
/// residual is the one of smaller magnitude. A spike is far from both sides; a sample next to a
/// step or a removed outlier agrees with at least one side, so steps and neighbours of spikes do
/// not raise alarms. A side needs at least 2 samples; with one side only, that side decides; with
/// none, the residual is NaN (the rate test still sees the sample).
fn one_sided_residuals(
    t: &[f64],
    h: &[f64],
    idx: &[usize],
    hw: usize,
    max_step_s: f64,
    sw: &SideWeights,
) -> Vec<f64> {
    (0..idx.len())
        .map(|k| residual_between(t, h, idx[k], &idx[..k], &idx[k + 1..], hw, max_step_s, sw))
        .collect()
}

/// Weights of a least-squares line through L samples at 1..L steps from a point, evaluated at
/// the point (nearest sample first), for L up to a limit; used when a side is regular.
struct SideWeights {
    step_s: f64,
    w: Vec<Vec<f64>>,
}

impl SideWeights {
    fn new(step_s: f64, max_l: usize) -> SideWeights {
        let w = (0..=max_l)
            .map(|l| {
                if l < 2 {
                    return Vec::new();
                }
                let lf = l as f64;
                let xbar = (lf + 1.0) / 2.0;
                let sxx = lf * (lf * lf - 1.0) / 12.0;
                (1..=l)
                    .map(|j| 1.0 / lf - xbar * (j as f64 - xbar) / sxx)
                    .collect()
            })
            .collect();
        SideWeights { step_s, w }
    }

    /// The weights for a side of `l` samples whose farthest lies `far_s` from the point, when the
    /// side is regular (then the farthest is `l` steps away).
    fn weights(&self, l: usize, far_s: f64) -> Option<&[f64]> {
        let w = self.w.get(l).filter(|w| !w.is_empty())?;
        ((far_s - l as f64 * self.step_s).abs() < 0.05 * self.step_s).then_some(w.as_slice())
    }
}

/// The residual of sample `i` from the samples `before` (ascending, ending just before it) and
/// `after` (ascending, starting just after it), as in [`one_sided_residuals`].
#[allow(clippy::too_many_arguments)]
fn residual_between(
    t: &[f64],
    h: &[f64],
    i: usize,
    before: &[usize],
    after: &[usize],
    hw: usize,
    max_step_s: f64,
    sw: &SideWeights,
) -> f64 {
    let tk = t[i];
    // Up to hw samples each side, stopping at a hole.
    let mut a = before.len();
    let mut prev_t = tk;
    while a > 0 && before.len() - a < hw && prev_t - t[before[a - 1]] <= max_step_s {
        a -= 1;
        prev_t = t[before[a]];
    }
    let mut b = 0;
    let mut prev_t = tk;
    while b < after.len() && b < hw && t[after[b]] - prev_t <= max_step_s {
        prev_t = t[after[b]];
        b += 1;
    }
    // A side of L samples at exactly 1..L steps from the sample uses precomputed weights.
    let predict = |side: &[usize], nearest_first: bool| -> Option<f64> {
        let l = side.len();
        if l < 2 {
            return None;
        }
        let far = if nearest_first { side[l - 1] } else { side[0] };
        if let Some(w) = sw.weights(l, (t[far] - tk).abs()) {
            let sum = if nearest_first {
                side.iter().zip(w).map(|(&q, wj)| wj * h[q]).sum()
            } else {
                side.iter().rev().zip(w).map(|(&q, wj)| wj * h[q]).sum()
            };
            return Some(sum);
        }
        Some(line_at_zero(
            side.iter().map(|&q| (t[q] - tk) / 3600.0),
            side.iter().map(|&q| h[q]),
        ))
    };
    let hk = h[i];
    let left = predict(&before[a..], false).map(|p| hk - p);
    let right = predict(&after[..b], true).map(|p| hk - p);
    match (left, right) {
        (Some(l), Some(r)) => {
            if l.abs() <= r.abs() {
                l
            } else {
                r
            }
        }
        (Some(v), None) | (None, Some(v)) => v,
        (None, None) => f64::NAN,
    }
}

/// Runs every test on a record given in file order.
///
/// # Units
/// `times_s` UTC seconds, `heights_m` metres above chart datum.
pub fn run_qc(times_s: &[f64], heights_m: &[f64], th: &QcThresholds) -> QcResult {
    assert_eq!(times_s.len(), heights_m.len());
    let n = times_s.len();
    let mut fl = Flagger {
        flags: vec![QcFlags::default(); n],
        notes: Vec::new(),
    };

    // 1. Time order: keep the longest run of strictly increasing times (in file order) and flag
    // the rest, so that one mistyped time is blamed alone instead of everything after it.
    let ordered = longest_increasing(times_s);
    let mut conflicts: Vec<(usize, usize)> = Vec::new(); // (kept, later copy), different readings
    let mut distant: Vec<(usize, usize)> = Vec::new(); // (kept, later copy), equal readings apart
    {
        let mut keep = vec![false; n];
        for &i in &ordered {
            keep[i] = true;
        }
        for i in 0..n {
            if keep[i] || !times_s[i].is_finite() {
                continue;
            }
            let t = times_s[i];
            // The kept samples around position i in file order.
            let k = ordered.partition_point(|&q| q < i);
            let before = k.checked_sub(1).map(|q| ordered[q]);
            let after = ordered.get(k).copied();
            let twin = ordered
                .binary_search_by(|&q| times_s[q].total_cmp(&t))
                .ok()
                .map(|p| ordered[p]);
            if let Some(q) = twin {
                let (h, hq) = (heights_m[i], heights_m[q]);
                // A repeated row: only copies of the same time lie between the two in the file.
                let (a, b) = (q.min(i), q.max(i));
                let neighbours = (a + 1..b).all(|r| times_s[r].total_cmp(&t).is_eq());
                if (h == hq || h.to_bits() == hq.to_bits()) && !neighbours {
                    distant.push((q, i));
                } else if h == hq || h.to_bits() == hq.to_bits() {
                    fl.flag(
                        i,
                        QcFlag::DuplicateTime,
                        QcReason::DuplicateTime { t_s: t, kept: q },
                    );
                } else {
                    // Neither copy can be trusted over the other: both are set aside.
                    conflicts.push((q, i));
                }
            } else {
                let why = match (before, after) {
                    (Some(b), _) if t < times_s[b] => QcReason::EarlierThanPrevious {
                        t_s: t,
                        by_s: times_s[b] - t,
                        previous: b,
                    },
                    (_, Some(a)) if t > times_s[a] => QcReason::LaterThanNext {
                        t_s: t,
                        by_s: t - times_s[a],
                        next: a,
                    },
                    _ => QcReason::OutOfOrder { t_s: t },
                };
                fl.flag(i, QcFlag::TimeOrder, why);
            }
        }
        for &(q, i) in &conflicts {
            for (a, b) in [(i, q), (q, i)] {
                fl.flag(
                    a,
                    QcFlag::DuplicateTime,
                    QcReason::ConflictingDuplicate {
                        t_s: times_s[a],
                        other: b,
                        other_level_m: heights_m[b],
                    },
                );
            }
        }
        for &(q, i) in &distant {
            for (a, b) in [(i, q), (q, i)] {
                fl.flag(
                    a,
                    QcFlag::DuplicateTime,
                    QcReason::DistantDuplicate {
                        t_s: times_s[a],
                        other: b,
                    },
                );
            }
        }
    }
    let mut steps: Vec<f64> = ordered
        .windows(2)
        .map(|w| times_s[w[1]] - times_s[w[0]])
        .collect();
    let nominal_step_s = if steps.is_empty() {
        0.0
    } else {
        median_of(&mut steps)
    };

    // 7 (computed on the ordered samples, before exclusions). Gaps.
    if nominal_step_s > 0.0 {
        for w in ordered.windows(2) {
            let dt = times_s[w[1]] - times_s[w[0]];
            if dt > th.gap_factor * nominal_step_s {
                fl.flag(
                    w[1],
                    QcFlag::GapBefore,
                    QcReason::GapBefore {
                        interval_s: dt,
                        nominal_step_s,
                    },
                );
            }
        }
    }

    // 2. Plausible band.
    let mut clean: Vec<usize> = Vec::with_capacity(ordered.len());
    for &i in &ordered {
        let h = heights_m[i];
        if !fl.flags[i].usable() {
            continue; // a kept copy of a conflicting duplicate time
        }
        if !h.is_finite() {
            fl.flag(i, QcFlag::OutOfBand, QcReason::NotFinite { level_m: h });
        } else if h < th.band_min_m || h > th.band_max_m {
            fl.flag(
                i,
                QcFlag::OutOfBand,
                QcReason::OutOfBand {
                    level_m: h,
                    band_min_m: th.band_min_m,
                    band_max_m: th.band_max_m,
                },
            );
        } else {
            clean.push(i);
        }
    }

    // 3. Flat lines: runs of equal readings among the clean samples. With the rule left at its
    // defaults, a run the record's own tide explains as a stand at a turning point is excused.
    let reading_resolution_m = reading_resolution(heights_m, &clean);
    let flat_set = th.flat_min_samples.is_some() || th.flat_min_duration_min.is_some();
    let flat_min_samples = th.flat_min_samples.unwrap_or(FLAT_MIN_SAMPLES);
    let flat_min_duration_min = th.flat_min_duration_min.unwrap_or(FLAT_MIN_DURATION_MIN);
    let mut stands = 0usize;
    let mut k = 0;
    while k < clean.len() {
        let mut e = k + 1;
        while e < clean.len() && heights_m[clean[e]] == heights_m[clean[k]] {
            e += 1;
        }
        let run = e - k;
        let dur_min = (times_s[clean[e - 1]] - times_s[clean[k]]) / 60.0;
        if run >= flat_min_samples.max(2) && dur_min >= flat_min_duration_min {
            if !flat_set && is_stand(times_s, heights_m, &clean, k, e, reading_resolution_m) {
                stands += 1;
                k = e;
                continue;
            }
            for &i in &clean[k + 1..e] {
                fl.flag(
                    i,
                    QcFlag::FlatLine,
                    QcReason::FlatLine {
                        reading_m: heights_m[clean[k]],
                        repeats: run,
                        duration_min: dur_min,
                        from_s: times_s[clean[k]],
                    },
                );
            }
        }
        k = e;
    }
    clean.retain(|&i| fl.flags[i].usable());

    // 4. Spikes. Sides may bridge one missing reading (2.5 steps).
    let hw = half_width(th.spike_window_min, nominal_step_s, 2);
    let side_step_s = (th.gap_factor.max(2.5)) * nominal_step_s;
    let sw = SideWeights::new(nominal_step_s, hw);
    let resid = one_sided_residuals(times_s, heights_m, &clean, hw, side_step_s, &sw);
    let robust_sigma_m = robust_sigma(resid.iter().copied().filter(|r| r.is_finite()));
    // The smaller of two residuals is narrower in its core than in its tails (where the sample's
    // own noise makes both large), so its robust σ understates the tails: the limit is also at
    // least `spike_k` standard deviations of one side's residual for the record's white noise
    // (σ from second differences, robust; a side of L samples extrapolated one step adds
    // 1/L + x̄²/Sxx of σ² to it). Then noise alone passes the limit with a chance below that
    // of one Gaussian residual beyond `spike_k` σ (2e-9 at 6), whatever the step.
    let pre_noise_sigma_m = robust_sigma(
        clean
            .windows(3)
            .map(|w| heights_m[w[2]] - 2.0 * heights_m[w[1]] + heights_m[w[0]]),
    ) / 6f64.sqrt();
    let side_var = {
        let l = hw.max(2) as f64;
        let xbar = (l + 1.0) / 2.0;
        1.0 / l + xbar * xbar / (l * (l * l - 1.0) / 12.0)
    };
    let noise_limit_m = th.spike_k * pre_noise_sigma_m * (1.0 + side_var).sqrt();
    let spike_limit = (th.spike_k * robust_sigma_m)
        .max(if noise_limit_m.is_finite() {
            noise_limit_m
        } else {
            0.0
        })
        .max(th.spike_min_m);
    // Second look at each candidate with the other candidates left out of its neighbours, so
    // that a sample is not blamed for a spike next to it.
    let candidates: Vec<usize> = (0..clean.len())
        .filter(|&k| resid[k].abs() > spike_limit)
        .collect();
    let others: Vec<usize> = {
        let mut is_cand = vec![false; clean.len()];
        for &k in &candidates {
            is_cand[k] = true;
        }
        (0..clean.len())
            .filter(|&k| !is_cand[k])
            .map(|k| clean[k])
            .collect()
    };
    for &k in &candidates {
        let i = clean[k];
        let p = others.partition_point(|&q| times_s[q] < times_s[i]);
        let r = residual_between(
            times_s,
            heights_m,
            i,
            &others[..p],
            &others[p..],
            hw,
            side_step_s,
            &sw,
        );
        let r = if r.is_nan() { resid[k] } else { r };
        if r.abs() > spike_limit {
            fl.flag(
                i,
                QcFlag::Spike,
                QcReason::Spike {
                    residual_m: r,
                    robust_sigma_m,
                    limit_m: spike_limit,
                },
            );
        }
    }
    clean.retain(|&i| fl.flags[i].usable());

    // 5. Timing faults at boundaries, then level shifts: across holes, then away from them.
    let timing_out: Vec<bool> = fl
        .flags
        .iter()
        .map(|f| f.contains(QcFlag::TimeOrder) || f.contains(QcFlag::DuplicateTime))
        .collect();
    boundary_lags(
        times_s,
        heights_m,
        &clean,
        &timing_out,
        nominal_step_s,
        th,
        &mut fl,
    );
    clean.retain(|&i| fl.flags[i].usable());
    boundary_shifts(
        times_s,
        heights_m,
        &clean,
        &timing_out,
        nominal_step_s,
        th,
        &mut fl,
    );
    clean.retain(|&i| fl.flags[i].usable());
    level_shifts(times_s, heights_m, &clean, nominal_step_s, th, &mut fl);
    clean.retain(|&i| fl.flags[i].usable());

    // Noise of the readings, from second differences of consecutive clean samples:
    // var(h[i+1] − 2h[i] + h[i−1]) = 6σ² for white noise; the tide's curvature adds little at
    // minute steps.
    let noise_sigma_m = robust_sigma(
        clean
            .windows(3)
            .map(|w| heights_m[w[2]] - 2.0 * heights_m[w[1]] + heights_m[w[0]]),
    ) / 6f64.sqrt();

    // 6. Rate. Residuals are computed only for the pairs that break the limit (rare).
    let resid_at = |k: usize| {
        residual_between(
            times_s,
            heights_m,
            clean[k],
            &clean[..k],
            &clean[k + 1..],
            hw,
            side_step_s,
            &sw,
        )
    };
    // The allowance grows with the record's noise: two readings differ by noise alone by up to
    // about 6·√2·σ (a chance of 2e-9 per pair for Gaussian noise).
    let allowance = th
        .rate_allowance_m
        .max(6.0 * std::f64::consts::SQRT_2 * noise_sigma_m);
    // The rate limit: as set, else the record's own fast rate with a margin, never below the
    // floor. Taken from the samples the earlier tests left clean, over half-hour baselines (so
    // noise hardly enters), as a 99th percentile (so the few faults left cannot raise it).
    let (max_rate_m_per_h, max_rate_source, record_fast_rate_m_per_h) = match th.max_rate_m_per_h {
        Some(r) => (r, LimitSource::Set, None),
        None => {
            let own = record_fast_rate(times_s, heights_m, &clean, nominal_step_s);
            match own {
                Some(r) if RATE_RECORD_FACTOR * r > RATE_FLOOR_M_PER_H => {
                    (RATE_RECORD_FACTOR * r, LimitSource::Record, own)
                }
                _ => (RATE_FLOOR_M_PER_H, LimitSource::Default, own),
            }
        }
    };
    let score = |r: f64| if r.is_nan() { f64::INFINITY } else { r.abs() };
    let mut last_kept = 0usize; // position in `clean` of the last sample not flagged
    for k in 1..clean.len() {
        let (a, b) = (clean[last_kept], clean[k]);
        let dt_h = (times_s[b] - times_s[a]) / 3600.0;
        let dh = heights_m[b] - heights_m[a];
        let allowed = max_rate_m_per_h * dt_h + allowance;
        if dh.abs() <= allowed {
            last_kept = k;
            continue;
        }
        // The one of the pair with the larger spike residual is the suspect (an end sample,
        // with no residual, is).
        let b_suspect = score(resid_at(k)) >= score(resid_at(last_kept));
        let (pick, other) = if b_suspect { (b, a) } else { (a, b) };
        fl.flag(
            pick,
            QcFlag::Rate,
            QcReason::Rate {
                change_m: dh,
                interval_h: dt_h,
                other_s: times_s[other],
                max_rate_m_per_h,
                allowance_m: allowance,
            },
        );
        if !b_suspect {
            last_kept = k;
        }
    }

    fl.notes.sort_by_key(|n| (n.sample, n.flag));
    let mut counts = [0usize; N_FLAGS];
    for f in &fl.flags {
        for q in f.iter() {
            counts[q as usize] += 1;
        }
    }
    QcResult {
        flags: fl.flags,
        notes: fl.notes,
        nominal_step_s,
        robust_sigma_m,
        noise_sigma_m,
        counts,
        limits: QcLimits {
            max_rate_m_per_h,
            max_rate_source,
            record_fast_rate_m_per_h,
            flat_min_samples,
            flat_min_duration_min,
            flat_source: if flat_set {
                LimitSource::Set
            } else {
                LimitSource::Default
            },
            stands_excused: !flat_set,
            reading_resolution_m,
            stands,
        },
    }
}

/// Resolution of the readings: the 0.1th percentile of the non-zero |differences| between
/// consecutive samples of `idx` (0 when there is none). A record written to 1 cm gives 0.01 m;
/// the percentile rather than the least keeps one stray reading from setting it.
fn reading_resolution(h: &[f64], idx: &[usize]) -> f64 {
    let mut d: Vec<f64> = idx
        .windows(2)
        .map(|w| (h[w[1]] - h[w[0]]).abs())
        .filter(|d| *d > 0.0 && d.is_finite())
        .collect();
    if d.is_empty() {
        return 0.0;
    }
    let k = d.len() / 1000;
    *d.select_nth_unstable_by(k, f64::total_cmp).1
}

/// The record's own fast rate, metres per hour: the 99th percentile of |Δh|/Δt between samples
/// of `clean` [`RATE_BASELINE_MIN`] apart (at least one step; a baseline across a hole longer
/// than half its length again is skipped). `None` below [`RATE_MIN_BASELINES`] baselines.
fn record_fast_rate(t: &[f64], h: &[f64], clean: &[usize], step_s: f64) -> Option<f64> {
    if step_s <= 0.0 {
        return None;
    }
    let l = ((RATE_BASELINE_MIN * 60.0 / step_s).round() as usize).max(1);
    let longest_s = 1.5 * l as f64 * step_s + 0.5 * step_s;
    let mut rates: Vec<f64> = clean
        .iter()
        .zip(clean.iter().skip(l))
        .filter_map(|(&a, &b)| {
            let dt = t[b] - t[a];
            (dt > 0.0 && dt <= longest_s).then(|| (h[b] - h[a]).abs() / (dt / 3600.0))
        })
        .collect();
    if rates.len() < RATE_MIN_BASELINES {
        return None;
    }
    let k = ((rates.len() as f64 * 0.99) as usize).min(rates.len() - 1);
    Some(*rates.select_nth_unstable_by(k, f64::total_cmp).1)
}

/// Whether the run `clean[k..e]` of one repeated reading is a stand at a turning point of the
/// record's own tide rather than a stuck sensor.
///
/// A quadratic in time is fitted by least squares to the clean samples on both sides of the run
/// (within half the run's duration of it, at least 60 and at most 180 min; at least 3 samples
/// each side). The run is a stand when, at every one of its samples, the quadratic is within
/// `q + 3·se` of the repeated reading, `q` the readings' resolution and `se` the fitted curve's
/// standard error there (from the fit's residuals, at least those of rounding to `q`; flank
/// samples beyond 5 robust σ of the first fit are left out of a second). A stuck
/// sensor at mid-tide leaves the curve with the tide's slope across the run; one stuck through
/// a turning point for longer than a stand lasts leaves the curve's extreme beyond the reading;
/// one that freezes and later resumes elsewhere leaves no curve that joins both sides.
fn is_stand(t: &[f64], h: &[f64], clean: &[usize], k: usize, e: usize, q: f64) -> bool {
    let v = h[clean[k]];
    let (ta, tb) = (t[clean[k]], t[clean[e - 1]]);
    let w_s = (0.5 * (tb - ta)).clamp(3600.0, 10_800.0);
    let before = clean[..k]
        .iter()
        .rev()
        .take_while(|&&i| t[i] >= ta - w_s)
        .count();
    let after = clean[e..].iter().take_while(|&&i| t[i] <= tb + w_s).count();
    if before < 3 || after < 3 {
        return false;
    }
    let tm = 0.5 * (ta + tb);
    let sc = 0.5 * (tb - ta) + w_s;
    let row = |ti: f64| {
        let x = (ti - tm) / sc;
        nalgebra::SVector::<f64, 3>::new(1.0, x, x * x)
    };
    let flank: Vec<usize> = clean[k - before..k]
        .iter()
        .chain(&clean[e..e + after])
        .copied()
        .collect();
    // Least squares over the flank samples kept; the coefficients, (XᵀX)⁻¹ and the residuals.
    type Fit = (
        nalgebra::SVector<f64, 3>,
        nalgebra::SMatrix<f64, 3, 3>,
        Vec<f64>,
    );
    let fit = |keep: &dyn Fn(usize) -> bool| -> Option<Fit> {
        let mut ata = nalgebra::SMatrix::<f64, 3, 3>::zeros();
        let mut aty = nalgebra::SVector::<f64, 3>::zeros();
        for (j, &i) in flank.iter().enumerate() {
            if keep(j) {
                let r = row(t[i]);
                ata += r * r.transpose();
                aty += r * h[i];
            }
        }
        let inv = ata.try_inverse()?;
        let c = inv * aty;
        let res = flank.iter().map(|&i| h[i] - c.dot(&row(t[i]))).collect();
        Some((c, inv, res))
    };
    let Some((c, inv, res)) = fit(&|_| true) else {
        return false;
    };
    // One refit without flank samples far from the curve (a spike beside the run would
    // otherwise widen the tolerance): beyond 5 robust σ, at least the rounding's.
    let floor = q / 12f64.sqrt();
    let cut = 5.0 * robust_sigma(res.iter().copied()).max(floor);
    let outlier = |j: usize| res[j].abs() > cut;
    let kept_before = (0..before).filter(|&j| !outlier(j)).count();
    let kept_after = (before..before + after).filter(|&j| !outlier(j)).count();
    let (c, inv, res, n) = if kept_before + kept_after == before + after {
        (c, inv, res, before + after)
    } else if kept_before < 3 || kept_after < 3 {
        return false;
    } else {
        let Some((c2, inv2, res2)) = fit(&|j| !outlier(j)) else {
            return false;
        };
        let res2: Vec<f64> = (0..res2.len())
            .filter(|&j| !outlier(j))
            .map(|j| res2[j])
            .collect();
        (c2, inv2, res2, kept_before + kept_after)
    };
    let rss: f64 = res.iter().map(|d| d * d).sum();
    let var = (rss / (n as f64 - 3.0)).max(floor * floor);
    clean[k..e].iter().all(|&i| {
        let r = row(t[i]);
        let se = (var * (r.transpose() * inv * r)[0]).sqrt();
        (c.dot(&r) - v).abs() <= q + 3.0 * se
    })
}

/// Two samples with the same time and different readings: `(first, later)` indices in file
/// order.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DuplicateConflict {
    /// The first sample in the file with this time.
    pub first: usize,
    /// A later sample with the same time and another reading.
    pub later: usize,
}

/// Every sample whose time equals an earlier sample's while its reading differs from that
/// sample's, paired with the first sample of that time (file order, sorted by `later`). Equal
/// readings (a row written twice) are not conflicts; NaN equals NaN here. Non-finite times are
/// left to the reader.
///
/// # Units
/// `times_s` UTC seconds, `heights_m` metres.
pub fn conflicting_duplicates(times_s: &[f64], heights_m: &[f64]) -> Vec<DuplicateConflict> {
    let mut idx: Vec<usize> = (0..times_s.len())
        .filter(|&i| times_s[i].is_finite())
        .collect();
    idx.sort_by(|&a, &b| times_s[a].total_cmp(&times_s[b]).then(a.cmp(&b)));
    let mut out = Vec::new();
    let mut k = 0;
    while k < idx.len() {
        let first = idx[k];
        let mut e = k + 1;
        while e < idx.len() && times_s[idx[e]] == times_s[first] {
            let (h, h0) = (heights_m[idx[e]], heights_m[first]);
            if !(h == h0 || h.to_bits() == h0.to_bits()) {
                out.push(DuplicateConflict {
                    first,
                    later: idx[e],
                });
            }
            e += 1;
        }
        k = e;
    }
    out.sort_by_key(|c| c.later);
    out
}

/// Indices (in file order) of a longest strictly increasing subsequence of `t` (patience
/// sorting, O(n log n)); non-finite times are never kept.
fn longest_increasing(t: &[f64]) -> Vec<usize> {
    if t.iter().all(|x| x.is_finite()) && t.windows(2).all(|w| w[0] < w[1]) {
        return (0..t.len()).collect(); // the usual case: nothing out of order
    }
    // Built from the end of the file backwards as a longest decreasing run, so that among runs
    // of equal length the one keeping the earlier samples wins (a fault is usually a later
    // sample going back), and of repeated times the first in the file stays.
    let mut tails: Vec<usize> = Vec::new(); // by run length: the latest-in-time start found
    let mut next = vec![usize::MAX; t.len()];
    for i in (0..t.len()).rev() {
        let x = t[i];
        if !x.is_finite() {
            continue;
        }
        // Runs (read forwards) starting after i must start later than x.
        let pos = tails.partition_point(|&j| t[j] > x);
        if pos > 0 {
            next[i] = tails[pos - 1];
        }
        if pos == tails.len() {
            tails.push(i);
        } else {
            tails[pos] = i;
        }
    }
    let mut out = Vec::with_capacity(tails.len());
    let mut cur = tails.last().copied();
    while let Some(i) = cur {
        out.push(i);
        cur = (next[i] != usize::MAX).then(|| next[i]);
    }
    out
}

/// Least-squares line through `(x, y)` evaluated at `x = 0`.
fn line_at_zero(x: impl Iterator<Item = f64> + Clone, y: impl Iterator<Item = f64>) -> f64 {
    let (mut n, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (xi, yi) in x.zip(y) {
        n += 1.0;
        sx += xi;
        sy += yi;
        sxx += xi * xi;
        sxy += xi * yi;
    }
    let det = n * sxx - sx * sx;
    if det.abs() < 1e-300 {
        return sy / n;
    }
    // value at 0 = intercept
    (sy * sxx - sx * sxy) / det
}

/// Step `J` of the least-squares fit `y = c0 + c1 x + c2 x² + c3 x³ + J·[x > 0]` to samples at
/// offsets `x` (hours from the junction; left side negative). None when singular.
fn cubic_step_fit(x: &[f64], y: &[f64]) -> Option<f64> {
    let mut ata = nalgebra::SMatrix::<f64, 5, 5>::zeros();
    let mut aty = nalgebra::SVector::<f64, 5>::zeros();
    for (&xi, &yi) in x.iter().zip(y) {
        let r = nalgebra::SVector::<f64, 5>::new(
            1.0,
            xi,
            xi * xi,
            xi * xi * xi,
            if xi > 0.0 { 1.0 } else { 0.0 },
        );
        ata += r * r.transpose();
        aty += r * yi;
    }
    ata.cholesky().map(|c| c.solve(&aty)[4])
}

/// The step statistic `J` at each junction `k` (between `clean[k-1]` and `clean[k]`), or NaN where
/// the windows are not available.
///
/// `J` is the step term of one least-squares fit across the junction: a cubic in time plus a
/// step, over `window_min` of samples on each side (at least 8). The cubic follows the tide (what
/// is left is of fourth order and symmetric about the junction, so it barely enters the step:
/// below 1 mm for a 1.5 m M2 with 60-min windows); the step takes what the cubic cannot.
pub fn step_statistic(
    times_s: &[f64],
    heights_m: &[f64],
    clean: &[usize],
    nominal_step_s: f64,
    window_min: f64,
) -> Vec<f64> {
    let m = clean.len();
    let l = step_window_samples(window_min, nominal_step_s);
    let mut out = vec![f64::NAN; m];
    if m < 2 * l || nominal_step_s <= 0.0 {
        return out;
    }
    // Weights for a regular window (samples at −l+½ … −½, ½ … l−½ steps from the junction):
    // J = Σ w_j y_j, the step row of (XᵀX)⁻¹Xᵀ, computed once.
    let w: Vec<f64> = {
        let xs: Vec<f64> = (0..2 * l).map(|j| j as f64 - l as f64 + 0.5).collect();
        let sc = 1.0 / l as f64;
        let mut ata = nalgebra::SMatrix::<f64, 5, 5>::zeros();
        let rows: Vec<nalgebra::SVector<f64, 5>> = xs
            .iter()
            .map(|&x| {
                let x = x * sc;
                nalgebra::SVector::<f64, 5>::new(
                    1.0,
                    x,
                    x * x,
                    x * x * x,
                    if x > 0.0 { 1.0 } else { 0.0 },
                )
            })
            .collect();
        for r in &rows {
            ata += r * r.transpose();
        }
        match ata.try_inverse() {
            Some(inv) => rows.iter().map(|r| (inv * r)[4]).collect(),
            None => return out,
        }
    };
    let tol = 0.05 * nominal_step_s;
    let max_junction = (window_min * 60.0).max(nominal_step_s);
    // gaps_before[k]: holes longer than a quarter of the window among clean[0..=k]. Shorter
    // holes (a missing reading, a removed spike) are handled by the irregular fit.
    let max_hole_s = (window_min * 60.0 / 4.0).max(1.5 * nominal_step_s);
    let mut gaps_before = vec![0usize; m];
    for k in 1..m {
        let long = times_s[clean[k]] - times_s[clean[k - 1]] > max_hole_s;
        gaps_before[k] = gaps_before[k - 1] + usize::from(long);
    }
    let mut xs = Vec::with_capacity(2 * l);
    let mut ys = Vec::with_capacity(2 * l);
    let hc: Vec<f64> = clean.iter().map(|&i| heights_m[i]).collect();
    for k in l..=(m - l) {
        let win = &clean[k - l..k + l];
        let t_mid = 0.5 * (times_s[clean[k - 1]] + times_s[clean[k]]);
        let junction = times_s[clean[k]] - times_s[clean[k - 1]];
        if junction > max_junction {
            continue;
        }
        // A window with a gap inside says little about a step: skip (the junction itself may
        // be a gap up to the window's length — a gauge is often re-levelled during a stop).
        if gaps_before[k - 1] != gaps_before[k - l] || gaps_before[k + l - 1] != gaps_before[k] {
            continue;
        }
        let span = times_s[win[2 * l - 1]] - times_s[win[0]];
        let regular = (junction - nominal_step_s).abs() < tol
            && (span - (2 * l - 1) as f64 * nominal_step_s).abs() < tol;
        out[k] = if regular {
            // Four partial sums over the contiguous copy of the clean heights: vectorises.
            let hs = &hc[k - l..k + l];
            let mut acc = [0.0f64; 4];
            let mut q = 0;
            while q + 4 <= hs.len() {
                for (a, (hv, wv)) in acc.iter_mut().zip(hs[q..q + 4].iter().zip(&w[q..q + 4])) {
                    *a += hv * wv;
                }
                q += 4;
            }
            let mut sum = acc[0] + acc[1] + acc[2] + acc[3];
            for (hv, wv) in hs[q..].iter().zip(&w[q..]) {
                sum += hv * wv;
            }
            sum
        } else {
            xs.clear();
            ys.clear();
            let half = (l as f64) * nominal_step_s;
            xs.extend(win.iter().map(|&i| (times_s[i] - t_mid) / half));
            ys.extend(win.iter().map(|&i| heights_m[i]));
            cubic_step_fit(&xs, &ys).unwrap_or(f64::NAN)
        };
    }
    out
}

fn level_shifts(
    times_s: &[f64],
    heights_m: &[f64],
    clean: &[usize],
    nominal_step_s: f64,
    th: &QcThresholds,
    fl: &mut Flagger,
) {
    let j = step_statistic(
        times_s,
        heights_m,
        clean,
        nominal_step_s,
        th.shift_window_min,
    );
    let reach = step_window_samples(th.shift_window_min, nominal_step_s);
    let mut found = find_steps(&j, reach, th.shift_k, th.shift_min_m);
    // A step's shoulders and side lobes can pass the limit too: within a window of a stronger
    // step, keep a weaker one only when it is a step back (opposite sign, at least half as
    // large: the end of a temporary offset).
    found.sort_by(|a, b| j[b.junction].abs().total_cmp(&j[a.junction].abs()));
    let mut steps: Vec<FoundStep> = Vec::new();
    for f in found {
        let shoulder = steps.iter().any(|s| {
            let (js, jf) = (j[s.junction], j[f.junction]);
            s.junction.abs_diff(f.junction) <= reach && (js * jf > 0.0 || jf.abs() < 0.5 * js.abs())
        });
        if !shoulder {
            steps.push(f);
        }
    }
    steps.sort_by_key(|f| f.junction);
    let m = clean.len();
    let mut i = 0;
    while i < steps.len() {
        let k1 = steps[i].junction;
        let j1 = j[k1];
        // A later step of opposite sign and similar size ends a temporary offset.
        let back = steps.get(i + 1).filter(|s2| {
            let j2 = j[s2.junction];
            j1 * j2 < 0.0 && (j1 + j2).abs() < 0.5 * j1.abs().max(j2.abs())
        });
        let step = |sets_aside_after| ShiftKind::Step {
            before_s: times_s[clean[k1 - 1]],
            after_s: times_s[clean[k1]],
            sets_aside_after,
        };
        let (end, kind) = match back {
            Some(s2) => (
                s2.junction,
                ShiftKind::Offset {
                    from_s: times_s[clean[k1]],
                    until_s: times_s[clean[s2.junction]],
                },
            ),
            None if th.shift_sets_aside_after => {
                (steps.get(i + 1).map_or(m, |s2| s2.junction), step(true))
            }
            None => (k1 + 1, step(false)),
        };
        let reason = QcReason::LevelShift {
            size_m: j1,
            kind,
            window_min: th.shift_window_min,
            limit_m: steps[i].limit_m,
            sigma_m: steps[i].sigma_m,
        };
        for &idx in &clean[k1..end] {
            fl.flag(idx, QcFlag::LevelShift, reason);
        }
        i += if back.is_some() { 2 } else { 1 };
    }
}

// ---------------------------------------------------------------------------------------------
// Boundary tests: a local tidal model fitted across a hole in the record.

/// Columns of the local tidal model.
const NB: usize = 10;

/// One row of the local tidal model at `x_h` hours from the boundary (`half_h` scales the
/// polynomial terms): mean, slope, an M2-speed sinusoid and its slow modulation (which takes up
/// S2 and N2 over half a day), K1- and M4-speed sinusoids.
fn local_row(x_h: f64, half_h: f64) -> [f64; NB] {
    // Speeds from the constituent table, °/h (M2 28.984, K1 15.041, M4 57.968).
    let (m2, k1, m4) = (
        28.984_104_2f64.to_radians(),
        15.041_068_6f64.to_radians(),
        57.968_208_4f64.to_radians(),
    );
    let u = x_h / half_h;
    let (s2, c2) = (m2 * x_h).sin_cos();
    let (s1, c1) = (k1 * x_h).sin_cos();
    let (s4, c4) = (m4 * x_h).sin_cos();
    [1.0, u, c2, s2, u * c2, u * s2, c1, s1, c4, s4]
}

/// A least-squares fit of the local model plus a step.
#[derive(Debug, Clone, Copy)]
struct LocalFit {
    /// Split position: the step applies to samples from this one on.
    split: usize,
    rss: f64,
    step_m: f64,
    /// Standard error of the step, from the fit's own residual variance.
    u_step_m: f64,
}

/// Fits the local model plus a step at each of `splits` (positions in `rows`, which are in time
/// order) in one pass: the step column's products are suffix sums of the rows.
fn local_fits(rows: &[[f64; NB]], y: &[f64], splits: &[usize]) -> Vec<LocalFit> {
    type M = nalgebra::SMatrix<f64, { NB + 1 }, { NB + 1 }>;
    type V = nalgebra::SVector<f64, { NB + 1 }>;
    let n = rows.len();
    let ybar = y.iter().sum::<f64>() / n.max(1) as f64;
    let mut ata = M::zeros();
    let mut aty = V::zeros();
    let mut yty = 0.0;
    // suffix sums of the rows and of y, from position p on
    let mut suf_r = vec![[0.0f64; NB]; n + 1];
    let mut suf_y = vec![0.0f64; n + 1];
    for i in (0..n).rev() {
        let yi = y[i] - ybar;
        for c in 0..NB {
            suf_r[i][c] = suf_r[i + 1][c] + rows[i][c];
        }
        suf_y[i] = suf_y[i + 1] + yi;
    }
    for (r, &yv) in rows.iter().zip(y) {
        let yi = yv - ybar;
        for a in 0..NB {
            for b in a..NB {
                ata[(a, b)] += r[a] * r[b];
            }
            aty[a] += r[a] * yi;
        }
        yty += yi * yi;
    }
    for a in 0..NB {
        for b in 0..a {
            ata[(a, b)] = ata[(b, a)];
        }
    }
    let dof = n.saturating_sub(NB + 1).max(1) as f64;
    splits
        .iter()
        .filter_map(|&p| {
            let mut m = ata;
            let mut v = aty;
            for c in 0..NB {
                m[(c, NB)] = suf_r[p][c];
                m[(NB, c)] = suf_r[p][c];
            }
            // No sample after the split: no step (its row and column reduce to the identity).
            m[(NB, NB)] = if p >= n { 1.0 } else { (n - p) as f64 };
            v[NB] = suf_y[p];
            let ch = m.cholesky()?;
            let beta = ch.solve(&v);
            let rss = (yty - beta.dot(&v)).max(0.0);
            let mut e = V::zeros();
            e[NB] = 1.0;
            let var_step = ch.solve(&e)[NB];
            Some(LocalFit {
                split: p,
                rss,
                step_m: beta[NB],
                u_step_m: (rss / dof * var_step).max(0.0).sqrt(),
            })
        })
        .collect()
}

/// A junction of the clean samples where the record has a hole or where the time-order test
/// took samples out, with the samples around it that the local model uses.
struct Boundary {
    /// Junction: between `clean[k - 1]` and `clean[k]`.
    k: usize,
    /// Window: `clean[lo..hi]`.
    lo: usize,
    hi: usize,
    /// Lags a clock jump here would have, minutes: the hole's length less one step (a jump
    /// ahead leaves a hole of its size; a jump back whose repeated times were all set aside
    /// too), either sign, and minus the span of times set aside in between (a jump back whose
    /// repeated times were taken out by the time-order test).
    lag_candidates_min: Vec<f64>,
}

/// The boundaries of `clean` and their windows. A boundary is an interval longer than
/// `gap_factor` nominal steps and 15 min (shorter holes are fitted through by the level-shift
/// test) but no longer than the window, or a junction between samples with samples set aside
/// for their time in between (in file order). A window reaches `boundary_window_min` each side
/// but stops at the neighbouring boundaries; a side shorter than 60 min or 8 samples leaves the
/// boundary untested.
fn boundaries(
    times_s: &[f64],
    clean: &[usize],
    timing_out: &[bool],
    nominal_step_s: f64,
    th: &QcThresholds,
    window_min: f64,
) -> Vec<Boundary> {
    let m = clean.len();
    let w_s = window_min * 60.0;
    let max_hole_s = th.boundary_window_min * 60.0;
    let min_hole_s = (th.gap_factor * nominal_step_s).max(900.0);
    let ks: Vec<usize> = (1..m)
        .filter(|&k| {
            let dt = times_s[clean[k]] - times_s[clean[k - 1]];
            (dt > min_hole_s && dt <= max_hole_s)
                || (clean[k - 1] + 1..clean[k]).any(|q| timing_out[q])
        })
        .collect();
    let mut out = Vec::new();
    for (q, &k) in ks.iter().enumerate() {
        let floor = if q > 0 { ks[q - 1] } else { 0 };
        let ceil = ks.get(q + 1).copied().unwrap_or(m);
        let t_left = times_s[clean[k - 1]];
        let t_right = times_s[clean[k]];
        let lo = floor + clean[floor..k].partition_point(|&i| times_s[i] < t_left - w_s);
        let hi = k + clean[k..ceil].partition_point(|&i| times_s[i] <= t_right + w_s);
        let left_ok = k - lo >= 8 && t_left - times_s[clean[lo]] >= 3600.0;
        let right_ok = hi - k >= 8 && times_s[clean[hi - 1]] - t_right >= 3600.0;
        if left_ok && right_ok {
            let mut lag_candidates_min = Vec::new();
            let hole_min = (t_right - t_left - nominal_step_s) / 60.0;
            if hole_min >= th.lag_min_min {
                lag_candidates_min.extend([hole_min, -hole_min]);
            }
            let out_times = (clean[k - 1] + 1..clean[k])
                .filter(|&q| timing_out[q] && times_s[q].is_finite())
                .map(|q| times_s[q]);
            let (lo_t, hi_t) = out_times.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
                (a.min(x), b.max(x))
            });
            let span_min = (hi_t - lo_t + nominal_step_s) / 60.0;
            if span_min.is_finite() && span_min >= th.lag_min_min {
                lag_candidates_min.push(-span_min);
            }
            out.push(Boundary {
                k,
                lo,
                hi,
                lag_candidates_min,
            });
        }
    }
    out
}

/// What the local model says about one boundary.
struct BoundaryFit {
    /// Best fit with the step at any junction of the window (no lag).
    step: LocalFit,
    /// Earliest split whose fit is as good as the best one within 4 residual σ (the step could
    /// start there).
    earliest_split: usize,
    /// Fit with neither step nor lag.
    plain: LocalFit,
    /// Best lag of the run after the boundary, minutes, and the fit with it (step at the
    /// boundary).
    lag: Option<(f64, LocalFit)>,
    /// Samples in the window.
    n: usize,
}

fn fit_boundary(
    times_s: &[f64],
    heights_m: &[f64],
    clean: &[usize],
    b: &Boundary,
    nominal_step_s: f64,
    th: &QcThresholds,
    with_lag: bool,
) -> Option<BoundaryFit> {
    let win = &clean[b.lo..b.hi];
    let n = win.len();
    let pb = b.k - b.lo;
    let t_mid = 0.5 * (times_s[clean[b.k - 1]] + times_s[clean[b.k]]);
    let half_h = (times_s[clean[b.hi - 1]] - times_s[clean[b.lo]]) / 7200.0;
    let x: Vec<f64> = win.iter().map(|&i| (times_s[i] - t_mid) / 3600.0).collect();
    let y: Vec<f64> = win.iter().map(|&i| heights_m[i]).collect();
    let rows: Vec<[f64; NB]> = x.iter().map(|&xh| local_row(xh, half_h)).collect();
    // Steps tested at every junction with 8 samples on each side, up to the level-shift test's
    // window from the boundary (beyond it that test sees the step without crossing the hole).
    let reach_h = (th.shift_window_min * 60.0 + nominal_step_s) / 3600.0;
    let (x_left, x_right) = (x[pb - 1], x[pb]);
    let splits: Vec<usize> = (8..=n.saturating_sub(8))
        .filter(|&p| x[p] >= x_left - reach_h && x[p - 1] <= x_right + reach_h)
        .collect();
    let fits = local_fits(&rows, &y, &splits);
    let best = *fits.iter().min_by(|a, c| a.rss.total_cmp(&c.rss))?;
    let plain = *local_fits(&rows, &y, &[n]).first()?;
    let var = best.rss / n.saturating_sub(NB + 1).max(1) as f64;
    let earliest_split = fits
        .iter()
        .filter(|f| f.rss - best.rss <= 16.0 * var)
        .map(|f| f.split)
        .min()
        .unwrap_or(best.split);
    // A lag: the run after the boundary moved by one of the boundary's candidate lags, with no
    // step (a clock jump leaves the level alone).
    let lag = if with_lag {
        b.lag_candidates_min
            .iter()
            .filter_map(|&l| {
                let rows: Vec<[f64; NB]> = x
                    .iter()
                    .enumerate()
                    .map(|(j, &xh)| local_row(if j >= pb { xh - l / 60.0 } else { xh }, half_h))
                    .collect();
                local_fits(&rows, &y, &[n]).first().map(|f| (l, *f))
            })
            .min_by(|p, q| p.1.rss.total_cmp(&q.1.rss))
    } else {
        None
    };
    Some(BoundaryFit {
        step: best,
        earliest_split,
        plain,
        lag,
        n,
    })
}

/// Timing faults at boundaries: a run after a boundary that, moved by one of the boundary's
/// candidate lags, fits the local model much better than unmoved and about as well as with the
/// best step. The run is set aside up to a boundary with the opposite lag (the clock set back),
/// else to the record's end.
fn boundary_lags(
    times_s: &[f64],
    heights_m: &[f64],
    clean: &[usize],
    timing_out: &[bool],
    nominal_step_s: f64,
    th: &QcThresholds,
    fl: &mut Flagger,
) {
    // Twice the window: a lag changes the phase of every cycle after the boundary, and the
    // longer the run compared the less of that the model's slow modulation can take up.
    let w = 2.0 * th.boundary_window_min;
    let bs = boundaries(times_s, clean, timing_out, nominal_step_s, th, w);
    let mut lags: Vec<(usize, f64, f64, f64)> = Vec::new(); // (k, lag, rms without, rms with)
    for b in &bs {
        let Some(f) = fit_boundary(times_s, heights_m, clean, b, nominal_step_s, th, true) else {
            continue;
        };
        let Some((lag_min, lf)) = f.lag else {
            continue;
        };
        // The lag must explain much of what the plain model leaves, and about as well as the
        // best step: near mid-tide a clock jump looks locally like a step of the rate times the
        // lag, and the lag (one value the hole itself gives) is the simpler explanation.
        let var = lf.rss.min(f.step.rss) / f.n.saturating_sub(NB + 2).max(1) as f64;
        let k2 = th.lag_k * th.lag_k;
        let gain = (f.plain.rss - lf.rss) / var.max(1e-12);
        let worse = (lf.rss - f.step.rss) / var.max(1e-12);
        if gain > k2 && worse < k2 {
            let nf = f.n as f64;
            lags.push((
                b.k,
                lag_min,
                (f.plain.rss / nf).sqrt(),
                (lf.rss / nf).sqrt(),
            ));
        }
    }
    let m = clean.len();
    let mut q = 0;
    while q < lags.len() {
        let (k1, l1, rms0, rms1) = lags[q];
        let back = lags.get(q + 1).filter(|&&(_, l2, _, _)| {
            l1 * l2 < 0.0 && (l1 + l2).abs() < 0.5 * l1.abs().max(l2.abs())
        });
        let end = back.map_or(m, |b| b.0);
        let reason = QcReason::TimeLag {
            lag_min: l1,
            from_s: times_s[clean[k1]],
            until_s: back.map(|b| times_s[clean[b.0]]),
            rms_without_m: rms0,
            rms_with_m: rms1,
        };
        for &i in &clean[k1..end] {
            fl.flag(i, QcFlag::TimeLag, reason);
        }
        q += if back.is_some() { 2 } else { 1 };
    }
}

/// Level shifts across boundaries, where the level-shift test's windows do not reach: the step
/// of the local model at the best junction of the window, accepted when it exceeds
/// `boundary_shift_k` standard errors and `shift_min_m`. The record is set aside from the
/// earliest junction where the step could start (up to the next level shift already found, or
/// the record's end; with `shift_sets_aside_after = false`, up to the best junction's sample).
fn boundary_shifts(
    times_s: &[f64],
    heights_m: &[f64],
    clean: &[usize],
    timing_out: &[bool],
    nominal_step_s: f64,
    th: &QcThresholds,
    fl: &mut Flagger,
) {
    let bs = boundaries(
        times_s,
        clean,
        timing_out,
        nominal_step_s,
        th,
        th.boundary_window_min,
    );
    for b in &bs {
        let Some(f) = fit_boundary(times_s, heights_m, clean, b, nominal_step_s, th, false) else {
            continue;
        };
        let limit = (th.boundary_shift_k * f.step.u_step_m).max(th.shift_min_m);
        if f.step.step_m.abs() <= limit {
            continue;
        }
        let from = b.lo + f.earliest_split.min(f.step.split);
        let at = b.lo + f.step.split;
        let end = if th.shift_sets_aside_after {
            // Samples are in file order; a level shift found earlier starts a new stretch.
            (clean[at] + 1..fl.flags.len())
                .find(|&r| fl.flags[r].contains(QcFlag::LevelShift))
                .map_or(clean.len(), |r| clean.partition_point(|&i| i < r))
        } else {
            at + 1
        };
        let reason = QcReason::BoundaryShift {
            size_m: f.step.step_m,
            u_size_m: f.step.u_step_m,
            boundary_from_s: times_s[clean[b.k - 1]],
            boundary_until_s: times_s[clean[b.k]],
            step_at_s: times_s[clean[at]],
            set_aside_from_s: times_s[clean[from]],
            limit_m: limit,
            window_min: th.boundary_window_min,
        };
        for &i in &clean[from..end] {
            fl.flag(i, QcFlag::LevelShift, reason);
        }
    }
}

/// A step found in a step statistic.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FoundStep {
    /// Junction index (the step lies before sample `junction`).
    pub junction: usize,
    /// Robust standard deviation of the statistic away from the steps found, metres.
    pub sigma_m: f64,
    /// The limit it exceeded, metres.
    pub limit_m: f64,
}

/// Steps in a step statistic `j`, largest first: repeatedly take the largest `|J|` not yet
/// explained, estimate the statistic's robust σ from the junctions farther than `reach` from it
/// and from every step already found (a step raises `|J|` over a whole window, which would
/// otherwise inflate σ in a short record), and accept it when `|J| > max(k·σ, min_m)`.
pub fn find_steps(j: &[f64], reach: usize, k: f64, min_m: f64) -> Vec<FoundStep> {
    let m = j.len();
    let mut near_step = vec![false; m];
    let mut found = Vec::new();
    while found.len() < 1000 {
        let Some(kmax) = (0..m)
            .filter(|&q| j[q].is_finite() && !near_step[q])
            .max_by(|&a, &b| j[a].abs().total_cmp(&j[b].abs()))
        else {
            break;
        };
        let sigma = robust_sigma(
            (0..m)
                .filter(|&q| j[q].is_finite() && !near_step[q] && q.abs_diff(kmax) > reach)
                .map(|q| j[q]),
        );
        let limit = (k * sigma).max(min_m);
        if j[kmax].abs() <= limit {
            break;
        }
        found.push(FoundStep {
            junction: kmax,
            sigma_m: sigma,
            limit_m: limit,
        });
        // Hide the step's own hill: the junctions around it where J keeps its sign and stays
        // above a fifth of its peak (at most a window each side). A step back (a temporary
        // offset) has the opposite sign and stays visible however close it is.
        let peak = j[kmax];
        let same =
            |q: usize| j[q].is_finite() && j[q] * peak > 0.0 && j[q].abs() > 0.2 * peak.abs();
        let mut lo = kmax;
        while lo > 0 && kmax - lo < reach && same(lo - 1) {
            lo -= 1;
        }
        let mut hi = kmax;
        while hi + 1 < m && hi - kmax < reach && same(hi + 1) {
            hi += 1;
        }
        for flag in &mut near_step[lo..=hi] {
            *flag = true;
        }
    }
    found.sort_by_key(|f| f.junction);
    found
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    /// M2 + S2 + K1 + O1 with realistic amplitudes (a mesotidal semidiurnal place) around a mean
    /// level of 2.5 m, speeds from the constituent table (°/h).
    fn tide(t_s: f64) -> f64 {
        let h = t_s / 3600.0;
        let c =
            |a: f64, speed_deg_h: f64, g_deg: f64| a * (speed_deg_h * h - g_deg).to_radians().cos();
        2.5 + c(1.5, 28.984_104_2, 40.0)
            + c(0.5, 30.0, 75.0)
            + c(0.15, 15.041_068_6, 200.0)
            + c(0.1, 13.943_035_6, 180.0)
    }

    /// A record every `step_s` for `days` with Gaussian noise `sigma_m`, rounded to 1 mm.
    fn record(step_s: f64, days: f64, sigma_m: f64, seed: u64) -> (Vec<f64>, Vec<f64>) {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let noise = Normal::new(0.0, sigma_m).unwrap();
        let n = (days * 86400.0 / step_s) as usize;
        let t: Vec<f64> = (0..n).map(|i| 1.78e9 + i as f64 * step_s).collect();
        let h = t
            .iter()
            .map(|&t| ((tide(t) + noise.sample(&mut rng)) * 1000.0).round() / 1000.0)
            .collect();
        (t, h)
    }

    fn th() -> QcThresholds {
        QcThresholds {
            band_min_m: 2.5 - 10.0,
            band_max_m: 2.5 + 10.0,
            ..QcThresholds::default()
        }
    }

    #[test]
    fn clean_records_raise_no_alarm() {
        // Realistic noise: 1 cm (σ) on a 6-min record for 60 days and on a 1-min record for 30
        // days (waves and sensor noise at a sheltered gauge; common practice), 1 mm resolution.
        for (step, days, seed) in [
            (360.0, 60.0, 1),
            (360.0, 60.0, 11),
            (360.0, 60.0, 12),
            (60.0, 30.0, 2),
            (60.0, 30.0, 21),
        ] {
            let (t, h) = record(step, days, 0.01, seed);
            let r = run_qc(&t, &h, &th());
            let flagged: Vec<_> = r.notes.iter().take(5).collect();
            assert_eq!(r.counts, [0; N_FLAGS], "step {step}: {flagged:?}");
            assert!(r.robust_sigma_m > 0.005 && r.robust_sigma_m < 0.02);
        }
    }

    #[test]
    fn planted_faults_are_found_at_their_samples() {
        let (mut t, mut h) = record(360.0, 20.0, 0.01, 3);
        // Spikes of +0.40 and −0.25 m.
        h[500] += 0.40;
        h[1500] -= 0.25;
        // A stuck sensor for 90 minutes from sample 2000 (16 repeated readings).
        for i in 2001..2016 {
            h[i] = h[2000];
        }
        // A level shift of +0.12 m from sample 3000 on (gauge re-levelled).
        for x in h.iter_mut().skip(3000) {
            *x += 0.12;
        }
        // A value far outside the band.
        h[4000] = 99.0;
        // A 3-hour gap after sample 4200.
        t.drain(4201..4231);
        h.drain(4201..4231);
        // A row written twice (same time, same reading) and a time going backwards.
        t[4500] = t[4499];
        h[4500] = h[4499];
        t[4600] = t[4598] - 1.0;
        let r = run_qc(&t, &h, &th());
        assert_eq!(r.flagged(QcFlag::Spike), vec![500, 1500]);
        assert_eq!(
            r.flagged(QcFlag::FlatLine),
            (2001..2016).collect::<Vec<_>>()
        );
        // The shift persists to the end: everything from its first sample on is set aside.
        let ls = r.flagged(QcFlag::LevelShift);
        assert_eq!(ls.first(), Some(&3000), "{} flagged", ls.len());
        assert!((3000..t.len()).all(|i| ls.contains(&i) || !r.flags[i].usable()));
        assert_eq!(r.flagged(QcFlag::OutOfBand), vec![4000]);
        // The gap, and the 12-min holes left where the duplicated and the backward times were
        // taken out of the timeline (1.5 × the 6-min step is 9 min).
        assert_eq!(r.flagged(QcFlag::GapBefore), vec![4201, 4501, 4601]);
        assert_eq!(r.flagged(QcFlag::DuplicateTime), vec![4500]);
        assert_eq!(r.flagged(QcFlag::TimeOrder), vec![4600]);
        // A time going back also leaves a longer step to the next sample, but not a gap.
        assert_eq!(r.count(QcFlag::Rate), 0, "{:?}", r.notes);
        assert!(matches!(r.notes_of(500)[0].reason, QcReason::Spike { .. }));
        assert!(r.flags[3000].blocks_interpolation());
    }

    #[test]
    fn step_statistic_ignores_the_tide_and_finds_small_steps() {
        // Noise-free 6-min record of the mesotidal tide (M2 1.5 m, rates up to 0.8 m/h): the
        // cubic-plus-step fit leaves the tide out of J (what remains is of fourth order).
        let (t, h) = record(360.0, 10.0, 0.0, 0);
        let clean: Vec<usize> = (0..t.len()).collect();
        let j = step_statistic(&t, &h, &clean, 360.0, 120.0);
        let worst = j
            .iter()
            .filter(|v| v.is_finite())
            .fold(0.0f64, |a, v| a.max(v.abs()));
        // Measured 2.5 mm with 120-min windows (1.2 mm with 60-min ones).
        assert!(
            worst < 0.004,
            "tide leaks {worst} m into the step statistic"
        );
        // With 1 cm noise (robust σ of J 8 mm, limit 8σ ≈ 0.066 m) a 0.08 m step is found at its
        // sample.
        let (t, mut h) = record(360.0, 10.0, 0.01, 9);
        for x in h.iter_mut().skip(1234) {
            *x += 0.08;
        }
        let r = run_qc(&t, &h, &th());
        let ls = r.flagged(QcFlag::LevelShift);
        assert_eq!(ls.first(), Some(&1234), "{:?}", r.notes.first());
        assert_eq!(ls.len(), t.len() - 1234);
    }

    #[test]
    fn faults_close_together_are_each_found() {
        // A temporary offset of +0.20 m for 60 min (10 samples): every offset sample, and only
        // those, is set aside.
        let (t, mut h) = record(360.0, 10.0, 0.01, 21);
        for x in &mut h[1000..1010] {
            *x += 0.20;
        }
        let r = run_qc(&t, &h, &th());
        assert_eq!(
            r.flagged(QcFlag::LevelShift),
            (1000..1010).collect::<Vec<_>>()
        );
        // A spike five samples before a +0.12 m step and one missing reading ten samples before
        // it: the spike and the step are both found at their samples.
        let (mut t, mut h) = record(360.0, 10.0, 0.01, 22);
        for x in h.iter_mut().skip(2000) {
            *x += 0.12;
        }
        h[1995] += 0.4;
        t.remove(1990);
        h.remove(1990);
        let r = run_qc(&t, &h, &th());
        assert_eq!(r.flagged(QcFlag::Spike), vec![1994]);
        assert_eq!(r.flagged(QcFlag::LevelShift).first(), Some(&1999));
        // One timestamp typed a day and two minutes late: only that sample is blamed (a day
        // exactly would land on another sample's time and be flagged duplicate_time).
        let (mut t, h) = record(360.0, 5.0, 0.01, 23);
        t[500] += 86_520.0;
        let r = run_qc(&t, &h, &th());
        assert_eq!(r.flagged(QcFlag::TimeOrder), vec![500]);
        assert!(matches!(
            r.notes_of(500)[0].reason,
            // 86 520 s late, less the 360-s step to the next sample.
            QcReason::LaterThanNext { by_s, .. } if (by_s - 86_160.0).abs() < 1e-6
        ));
    }

    #[test]
    fn noisy_one_minute_records_raise_no_rate_alarm() {
        // 1-min records with 2 and 3 cm white noise, and with a 5 cm seiche of 5-min period on
        // 1 cm noise (an exposed gauge; common practice): no sample is set aside.
        use std::f64::consts::PI;
        for (sd, seiche, seed) in [(0.02, 0.0, 31), (0.03, 0.0, 32), (0.01, 0.05, 33)] {
            let (t, mut h) = record(60.0, 20.0, sd, seed);
            for (x, tt) in h.iter_mut().zip(&t) {
                *x += seiche * (2.0 * PI * tt / 300.0).sin();
            }
            let r = run_qc(&t, &h, &th());
            assert_eq!(
                r.usable_count(),
                t.len(),
                "σ {sd}, seiche {seiche}: {:?}",
                r.notes.first()
            );
        }
    }

    #[test]
    fn impossible_rate_is_flagged_when_below_the_spike_threshold() {
        // A 1-min record where a noisy patch makes the spike scale large, then a 0.3 m jump back
        // and forth within one minute: a rate of 18 m/h.
        let (t, mut h) = record(60.0, 3.0, 0.01, 4);
        h[1000] += 0.3;
        let th = QcThresholds {
            spike_min_m: 1.0, // so that only the rate test can see it
            ..th()
        };
        let r = run_qc(&t, &h, &th);
        assert_eq!(r.flagged(QcFlag::Rate), vec![1000], "{:?}", r.notes);
    }

    #[test]
    fn flat_line_needs_both_count_and_duration() {
        let (t, mut h) = record(360.0, 2.0, 0.01, 5);
        // 5 equal readings over 24 min: shorter than 60 min, not a flat line.
        for i in 101..105 {
            h[i] = h[100];
        }
        let r = run_qc(&t, &h, &th());
        assert_eq!(r.count(QcFlag::FlatLine), 0);
        let short = QcThresholds {
            flat_min_duration_min: Some(20.0),
            ..th()
        };
        assert_eq!(
            run_qc(&t, &h, &short).flagged(QcFlag::FlatLine),
            vec![101, 102, 103, 104]
        );
    }

    /// Constituent speeds, °/h (the constituent table; common practice).
    const M2: f64 = 28.984_104_2;
    const S2: f64 = 30.0;
    const N2: f64 = 28.439_729_5;
    const K1: f64 = 15.041_068_6;
    const O1: f64 = 13.943_035_6;
    const M4: f64 = 57.968_208_4;
    const MS4: f64 = 58.984_104_2;

    /// One constituent: amplitude (m), speed (°/h), phase lag (°).
    type Constituent = (f64, f64, f64);

    /// A record every `step_s` for `days` of `mean + Σ A cos(speed·t − g)` (`(A m, speed °/h,
    /// g °)`) with Gaussian noise `sigma_m`, rounded to `resolution_m`.
    fn constituent_record(
        constituents: &[(f64, f64, f64)],
        mean_m: f64,
        step_s: f64,
        days: f64,
        sigma_m: f64,
        resolution_m: f64,
        seed: u64,
    ) -> (Vec<f64>, Vec<f64>) {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let noise = Normal::new(0.0, sigma_m.max(1e-12)).unwrap();
        let n = (days * 86400.0 / step_s) as usize;
        let t: Vec<f64> = (0..n).map(|i| 1.78e9 + i as f64 * step_s).collect();
        let h = t
            .iter()
            .map(|&t| {
                let hr = t / 3600.0;
                let tide: f64 = constituents
                    .iter()
                    .map(|&(a, w, g)| a * (w * hr - g).to_radians().cos())
                    .sum();
                ((mean_m + tide + noise.sample(&mut rng)) / resolution_m).round() * resolution_m
            })
            .collect();
        (t, h)
    }

    /// A macrotidal semidiurnal tide: M2 6.5, S2 1.0, N2 1.2, M4 0.4, MS4 0.2, K1 0.1, O1 0.08 m
    /// around 8 m (spring range near 15 m, about the largest known; peak rate about 4.5 m/h, the
    /// flood shortened by M4; from memory).
    const MACRO: [(f64, f64, f64); 7] = [
        (6.5, M2, 40.0),
        (1.0, S2, 75.0),
        (1.2, N2, 20.0),
        (0.4, M4, 170.0),
        (0.2, MS4, 200.0),
        (0.1, K1, 200.0),
        (0.08, O1, 180.0),
    ];

    fn macro_th() -> QcThresholds {
        QcThresholds {
            band_min_m: 8.0 - 10.0,
            band_max_m: 8.0 + 10.0,
            ..QcThresholds::default()
        }
    }

    /// Macrotidal records at the default thresholds: 1-min (30 days) and 6-min (60 days), noise
    /// 1 and 2 cm (a sheltered to an exposed gauge; common practice), readings to 1 mm. Nothing
    /// is flagged, and the rate limit is the record's own (peak rate of the tide above: about
    /// 6.5·0.506 + 1.0·0.524 + 1.2·0.496 + 0.4·1.012 + 0.2·1.03 ≈ 5.0 m/h at the rare
    /// alignment, 4–4.5 m/h at ordinary springs). At the old fixed 3 m/h the 6-min records are
    /// flagged (what the derived limit fixes; the check can fail).
    #[test]
    fn macrotidal_records_raise_no_alarm_at_defaults() {
        for (step, days, sd, seed) in [
            (60.0, 30.0, 0.01, 71),
            (60.0, 30.0, 0.02, 72),
            (360.0, 60.0, 0.01, 73),
            (360.0, 60.0, 0.02, 74),
        ] {
            let (t, h) = constituent_record(&MACRO, 8.0, step, days, sd, 0.001, seed);
            let r = run_qc(&t, &h, &macro_th());
            let what = format!("step {step} s, σ {sd}: {:?}", distinct_reasons(&r).first());
            assert_eq!(r.counts, [0; N_FLAGS], "{what}");
            let l = r.limits;
            assert_eq!(l.max_rate_source, LimitSource::Record, "{what}");
            let own = l.record_fast_rate_m_per_h.unwrap();
            assert!((3.8..5.2).contains(&own), "own rate {own} m/h; {what}");
            assert!((l.max_rate_m_per_h - RATE_RECORD_FACTOR * own).abs() < 1e-12);
            if step == 360.0 {
                let old = QcThresholds {
                    max_rate_m_per_h: Some(3.0),
                    ..macro_th()
                };
                let r3 = run_qc(&t, &h, &old);
                assert!(r3.count(QcFlag::Rate) > 100, "{}", r3.count(QcFlag::Rate));
                assert_eq!(r3.limits.max_rate_source, LimitSource::Set);
                assert_eq!(r3.limits.record_fast_rate_m_per_h, None);
            }
        }
    }

    /// On macrotidal records the planted faults are still found at the derived limits: two
    /// spikes (+0.40, −0.30 m), a stuck sensor for 90 min at mid-flood, and, with the spike and
    /// level-shift tests switched off, 1.0 m spikes by the rate test alone, in one sample in 200,
    /// which leave
    /// the derived limit within 1 % of the clean record's (a 99th percentile).
    #[test]
    fn macrotidal_faults_are_still_found() {
        for (step, seed) in [(60.0, 75), (360.0, 76)] {
            let (t, clean_h) = constituent_record(&MACRO, 8.0, step, 20.0, 0.01, 0.001, seed);
            let mut h = clean_h.clone();
            h[1000] += 0.40;
            h[3000] -= 0.30;
            // Mid-flood: the sample after the lowest reading of the third day.
            let day = (86_400.0 / step) as usize;
            let low = (2 * day..3 * day)
                .min_by(|&a, &b| h[a].total_cmp(&h[b]))
                .unwrap();
            let stuck0 = low + (3.0 * 3600.0 / step) as usize;
            let stuck_n = (90.0 * 60.0 / step) as usize;
            for i in stuck0 + 1..=stuck0 + stuck_n {
                h[i] = h[stuck0];
            }
            let r = run_qc(&t, &h, &macro_th());
            assert_eq!(r.flagged(QcFlag::Spike), vec![1000, 3000], "step {step}");
            assert_eq!(
                r.flagged(QcFlag::FlatLine),
                (stuck0 + 1..=stuck0 + stuck_n).collect::<Vec<_>>(),
                "step {step}"
            );
            assert_eq!(r.usable_count(), t.len() - 2 - stuck_n, "step {step}");

            let own_clean = run_qc(&t, &clean_h, &macro_th()).limits.max_rate_m_per_h;
            let mut h = clean_h.clone();
            let planted: Vec<usize> = (100..t.len() - 100).step_by(200).collect();
            for (q, &i) in planted.iter().enumerate() {
                h[i] += if q % 2 == 0 { 1.0 } else { -1.0 };
            }
            // (The level-shift test, which sees a lone 1 m spike on 6-min records as a
            // one-sample offset, is switched off too: its floor is `shift_min_m`.)
            let no_spike_test = QcThresholds {
                spike_min_m: 100.0,
                shift_min_m: 100.0,
                ..macro_th()
            };
            let r = run_qc(&t, &h, &no_spike_test);
            // Every planted spike is set aside by the rate test, and nothing else.
            let set_aside: Vec<usize> = (0..t.len()).filter(|&i| !r.flags[i].usable()).collect();
            assert_eq!(set_aside, planted, "step {step}");
            assert_eq!(r.flagged(QcFlag::Rate), planted, "step {step}");
            assert!((r.limits.max_rate_m_per_h / own_clean - 1.0).abs() < 0.01);
        }
    }

    /// Small tides read to 1 cm, 30 days each: semidiurnal (M2 0.25, S2 0.08 m), diurnal (K1
    /// 0.2, O1 0.15 m: a diurnal tide of small range) and mixed (M2 0.12, K1 0.15, O1 0.12 m,
    /// whose lesser high water is nearly a stand of hours), 1-min and 6-min, with 2 mm noise (a
    /// stilling well; common practice). Readings repeat for one to several hours at turning
    /// points: at the default rule these stands are excused and nothing is flagged; a rule set
    /// explicitly to the same 60 min flags them (the explicit value wins; the check can fail).
    #[test]
    fn small_tides_with_stands_raise_no_alarm_at_defaults() {
        let semi = [(0.25, M2, 40.0), (0.08, S2, 75.0)];
        let diurnal = [(0.2, K1, 200.0), (0.15, O1, 180.0)];
        let mixed = [(0.12, M2, 40.0), (0.15, K1, 200.0), (0.12, O1, 180.0)];
        let sets: [(&str, &[Constituent]); 3] = [
            ("semidiurnal", &semi),
            ("diurnal", &diurnal),
            ("mixed", &mixed),
        ];
        for (name, c) in sets {
            for (step, seed) in [(60.0, 81), (360.0, 82)] {
                let (t, h) = constituent_record(c, 1.0, step, 30.0, 0.002, 0.01, seed);
                let th = QcThresholds {
                    band_min_m: -9.0,
                    band_max_m: 11.0,
                    ..QcThresholds::default()
                };
                let r = run_qc(&t, &h, &th);
                let what = format!("{name}, step {step} s: {:?}", distinct_reasons(&r).first());
                assert_eq!(r.counts, [0; N_FLAGS], "{what}");
                assert!(r.limits.stands > 0, "no stand to excuse; {what}");
                assert!(
                    (r.limits.reading_resolution_m - 0.01).abs() < 1e-9,
                    "{what}"
                );
                let set = QcThresholds {
                    flat_min_duration_min: Some(60.0),
                    ..th
                };
                let r60 = run_qc(&t, &h, &set);
                assert!(r60.count(QcFlag::FlatLine) > 0, "{name}, step {step}");
                assert!(!r60.limits.stands_excused && r60.limits.stands == 0);
            }
        }
    }

    /// In the same small tides a stuck sensor is still found: frozen for 90 min at mid-tide,
    /// frozen at high water for 4 h (far longer than the stand, about 1 h for the semidiurnal
    /// tide: 2·acos(1 − 0.01/0.33)/ω), and frozen on the rise 5 cm (five reading steps) below
    /// high water until the tide falls back to the frozen reading (a clipped high water: the
    /// run's ends join the record, only its length and the tide's curvature tell); and frozen at
    /// mid-tide with a +0.3 m spike two samples after the run (which the fit leaves out).
    #[test]
    fn stuck_sensors_in_small_tides_are_found() {
        let semi = [(0.25, M2, 40.0), (0.08, S2, 75.0)];
        let diurnal = [(0.2, K1, 200.0), (0.15, O1, 180.0)];
        let sets: [(&str, &[Constituent]); 2] = [("semidiurnal", &semi), ("diurnal", &diurnal)];
        for (name, c) in sets {
            for (step, seed) in [(60.0, 83), (360.0, 84)] {
                let (t, h0) = constituent_record(c, 1.0, step, 10.0, 0.002, 0.01, seed);
                let day = (86_400.0 / step) as usize;
                let per_h = 3600.0 / step;
                let th = QcThresholds {
                    band_min_m: -9.0,
                    band_max_m: 11.0,
                    ..QcThresholds::default()
                };
                // The highest reading of day `d` (its first sample at the top).
                let high = |d: usize| {
                    (d * day..(d + 1) * day)
                        .max_by(|&a, &b| h0[a].total_cmp(&h0[b]).then(b.cmp(&a)))
                        .unwrap()
                };
                let mut cases: Vec<(&str, usize, usize)> = Vec::new();
                // Mid-tide: a quarter period after day 2's high water.
                let q = if name == "diurnal" { 6.0 } else { 3.1 };
                let a = high(2) + (q * per_h) as usize;
                cases.push(("mid-tide", a, a + (1.5 * per_h) as usize));
                let a = high(4);
                cases.push(("4 h at high water", a, a + (4.0 * per_h) as usize));
                let top = high(6);
                let a = (0..top).rev().find(|&i| h0[i] <= h0[top] - 0.05).unwrap();
                let back = (top..top + day / 2).find(|&i| h0[i] < h0[a]).unwrap() - 1;
                cases.push(("clipped high water", a, back));
                // Mid-tide again, with a +0.3 m spike among the samples just after the run.
                let a = high(8) + (q * per_h) as usize;
                cases.push(("mid-tide beside a spike", a, a + (1.5 * per_h) as usize));
                for (case, a, b) in cases {
                    let mut h = h0.clone();
                    for x in &mut h[a + 1..=b] {
                        *x = h0[a];
                    }
                    if case == "mid-tide beside a spike" {
                        h[b + 2] += 0.3;
                    }
                    let r = run_qc(&t, &h, &th);
                    let flat = r.flagged(QcFlag::FlatLine);
                    assert!(
                        (a + 1..=b).all(|i| flat.contains(&i)),
                        "{name}, step {step}, {case} ({} min): {} of {} flagged",
                        (t[b] - t[a]) / 60.0,
                        flat.len(),
                        b - a
                    );
                }
            }
        }
    }

    /// A richer tide than [`tide`]: M2 1.5, S2 0.5, N2 0.3, K2 0.14, K1 0.15, O1 0.1, P1 0.05,
    /// M4 0.06, MS4 0.03 m (speeds from the constituent table, °/h) around 2.5 m.
    fn rich_tide(t_s: f64) -> f64 {
        let h = t_s / 3600.0;
        let c =
            |a: f64, speed_deg_h: f64, g_deg: f64| a * (speed_deg_h * h - g_deg).to_radians().cos();
        2.5 + c(1.5, 28.984_104_2, 40.0)
            + c(0.5, 30.0, 75.0)
            + c(0.3, 28.439_729_5, 20.0)
            + c(0.14, 30.082_137_3, 80.0)
            + c(0.15, 15.041_068_6, 200.0)
            + c(0.1, 13.943_035_6, 180.0)
            + c(0.05, 14.958_931_4, 190.0)
            + c(0.06, 57.968_208_4, 100.0)
            + c(0.03, 58.984_104_2, 140.0)
    }

    /// Genuine times (every `step_s` for `days` from `t0`), levels of [`rich_tide`] with
    /// Gaussian noise `sigma_m`, rounded to 1 mm.
    fn rich_record(step_s: f64, days: f64, sigma_m: f64, seed: u64) -> (Vec<f64>, Vec<f64>) {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let noise = Normal::new(0.0, sigma_m.max(1e-12)).unwrap();
        let n = (days * 86400.0 / step_s) as usize;
        let t: Vec<f64> = (0..n).map(|i| 1.78e9 + i as f64 * step_s).collect();
        let h = t
            .iter()
            .map(|&t| ((rich_tide(t) + noise.sample(&mut rng)) * 1000.0).round() / 1000.0)
            .collect();
        (t, h)
    }

    /// The different reasons given, but for gap_before.
    fn distinct_reasons(r: &QcResult) -> Vec<(usize, QcReason)> {
        let mut out: Vec<(usize, QcReason)> = Vec::new();
        for n in r.notes.iter().filter(|n| n.flag != QcFlag::GapBefore) {
            if !out.iter().any(|(_, x)| *x == n.reason) {
                out.push((n.sample, n.reason));
            }
        }
        out
    }

    /// Removes the samples with times in `[from_s, from_s + len_s)`.
    fn cut(t: &mut Vec<f64>, h: &mut Vec<f64>, from_s: f64, len_s: f64) {
        let keep: Vec<bool> = t
            .iter()
            .map(|&x| x < from_s || x >= from_s + len_s)
            .collect();
        let mut k = keep.iter();
        h.retain(|_| *k.next().unwrap());
        let mut k = keep.iter();
        t.retain(|_| *k.next().unwrap());
    }

    #[test]
    fn clean_records_with_gaps_raise_no_alarm() {
        // Gaps of 20 min to 5 h, one every 25.5 h so that their start sweeps the tide's phase in
        // 30-min steps; 1-min records with noise σ 0.5, 1 and 2 cm, 6-min ones with 1 and 2 cm
        // (common practice for a sheltered to an exposed gauge). Nothing but gap_before may be flagged.
        for (step, sd, seed) in [
            (60.0, 0.01, 41),
            (60.0, 0.005, 43),
            (60.0, 0.02, 42),
            (360.0, 0.01, 44),
            (360.0, 0.02, 45),
        ] {
            for gap_min in [20.0, 48.0, 120.0, 300.0] {
                let (mut t, mut h) = rich_record(step, 54.0, sd, seed);
                let t0 = t[0];
                for q in 0..50 {
                    let from = t0 + 43_200.0 + q as f64 * 25.5 * 3600.0;
                    cut(&mut t, &mut h, from, gap_min * 60.0);
                }
                let r = run_qc(&t, &h, &th());
                let bad: Vec<_> = r
                    .notes
                    .iter()
                    .filter(|n| n.flag != QcFlag::GapBefore)
                    .take(3)
                    .collect();
                assert!(
                    bad.is_empty(),
                    "step {step} s, σ {sd} m, gaps {gap_min} min: {bad:?}"
                );
                assert_eq!(r.count(QcFlag::GapBefore), 50);
            }
        }
    }

    #[test]
    fn level_shift_next_to_a_gap_is_found_at_every_phase() {
        // A +0.15 m shift starting some time after (or before) a 48-min gap, the pair swept over
        // 25 h in 30-min steps: every shifted sample is set aside, and nothing more than the
        // boundary window before the gap.
        for (step, sd, seed) in [(60.0, 0.01, 51), (60.0, 0.02, 52), (360.0, 0.01, 53)] {
            for after_gap_h in [0.0, 0.5, 1.7, 3.0, -1.0] {
                for q in 0..50 {
                    let (mut t, mut h) = rich_record(step, 4.0, sd, seed + q);
                    let gap_from = t[0] + 86_400.0 + q as f64 * 1800.0;
                    let gap_len = 48.0 * 60.0;
                    let shift_from = if after_gap_h == 0.0 {
                        gap_from
                    } else if after_gap_h > 0.0 {
                        gap_from + gap_len + after_gap_h * 3600.0
                    } else {
                        gap_from + after_gap_h * 3600.0
                    };
                    for (x, &tt) in h.iter_mut().zip(&t) {
                        if tt >= shift_from {
                            *x += 0.15;
                        }
                    }
                    cut(&mut t, &mut h, gap_from, gap_len);
                    let r = run_qc(&t, &h, &th());
                    let shifted_kept = (0..t.len())
                        .filter(|&i| t[i] >= shift_from && r.flags[i].usable())
                        .count();
                    assert_eq!(
                        shifted_kept,
                        0,
                        "step {step} s, σ {sd}, {after_gap_h} h from the gap, start {q}: {:?}",
                        distinct_reasons(&r)
                    );
                    let first = (0..t.len())
                        .find(|&i| {
                            r.flags[i].contains(QcFlag::LevelShift)
                                || r.flags[i].contains(QcFlag::TimeLag)
                        })
                        .unwrap();
                    assert!(
                        t[first] >= shift_from.min(gap_from) - 6.0 * 3600.0,
                        "set aside from {} h before the shift",
                        (shift_from - t[first]) / 3600.0
                    );
                }
            }
        }
    }

    #[test]
    fn clock_jump_for_a_day_is_found_at_every_phase() {
        // The logger's clock jumps 1 h ahead for a day and is then set back: the day's samples
        // carry times 1 h late, and at the set-back an hour of times repeats. The jump's start
        // is swept over 25 h in 30-min steps, and also put just after each low water of a day.
        let low_waters: Vec<f64> = {
            let (t, _) = rich_record(60.0, 3.0, 0.0, 0);
            (1..t.len() - 1)
                .filter(|&i| {
                    t[i] > t[0] + 86_400.0
                        && t[i] < t[0] + 2.0 * 86_400.0
                        && rich_tide(t[i]) < rich_tide(t[i - 1])
                        && rich_tide(t[i]) <= rich_tide(t[i + 1])
                })
                .map(|i| t[i] + 600.0)
                .collect()
        };
        assert_eq!(low_waters.len(), 2);
        for (step, sd, seed) in [(60.0, 0.01, 61), (360.0, 0.01, 62), (360.0, 0.02, 63)] {
            let t0 = rich_record(step, 0.1, 0.0, 0).0[0];
            let starts = (0..50)
                .map(|q| t0 + 86_400.0 + q as f64 * 1800.0)
                .chain(low_waters.iter().copied());
            // Both ways a record can reach QC: with the repeated hour's two copies as written,
            // and with both copies already taken out (as when both are refused).
            let cases = starts.enumerate().flat_map(|c| [(c, false), (c, true)]);
            for ((q, jump), drop_repeats) in cases {
                let (genuine, h) = rich_record(step, 4.0, sd, seed + q as u64);
                let late = |tg: f64| tg >= jump && tg < jump + 86_400.0;
                let label = |tg: f64| if late(tg) { tg + 3600.0 } else { tg };
                let repeated =
                    |tg: f64| label(tg) >= jump + 86_400.0 && label(tg) < jump + 90_000.0;
                let keep: Vec<bool> = genuine
                    .iter()
                    .map(|&tg| !(drop_repeats && repeated(tg)))
                    .collect();
                let mut kk = keep.iter();
                let h: Vec<f64> = h.into_iter().filter(|_| *kk.next().unwrap()).collect();
                let mut kk = keep.iter();
                let genuine: Vec<f64> = genuine
                    .into_iter()
                    .filter(|_| *kk.next().unwrap())
                    .collect();
                let t: Vec<f64> = genuine.iter().map(|&tg| label(tg)).collect();
                let r = run_qc(&t, &h, &th());
                let what = || {
                    format!(
                        "step {step} s, σ {sd}, jump {q}, repeats dropped {drop_repeats}: {:?}",
                        distinct_reasons(&r)
                    )
                };
                // Every sample with a wrong time is set aside.
                for (i, &tg) in genuine.iter().enumerate() {
                    if late(tg) {
                        assert!(!r.flags[i].usable(), "{} kept; {}", i, what());
                    }
                }
                // The lag is named, within a few minutes of the hour.
                let lag = r.notes.iter().find_map(|n| match n.reason {
                    QcReason::TimeLag { lag_min, .. } => Some(lag_min),
                    _ => None,
                });
                assert!(
                    lag.is_some_and(|l| (l - 60.0).abs() <= 3.0),
                    "lag {lag:?}; {}",
                    what()
                );
                // The genuine record before the jump and after the repeated hour stays in use.
                for (i, &tg) in genuine.iter().enumerate() {
                    if tg < jump || tg >= jump + 86_400.0 + 3600.0 {
                        let f = r.flags[i];
                        assert!(
                            f.iter().all(|x| matches!(x, QcFlag::GapBefore)),
                            "genuine sample {i} set aside ({}); {}",
                            f.label(),
                            what()
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn flag_words_round_trip() {
        for f in QcFlag::ALL {
            assert_eq!(QcFlag::parse(f.as_str()), Some(f));
        }
        let mut s = QcFlags::default();
        assert!(s.usable());
        s.insert(QcFlag::GapBefore);
        assert!(s.usable());
        s.insert(QcFlag::DuplicateTime);
        assert!(!s.usable() && !s.blocks_interpolation());
        s.insert(QcFlag::Spike);
        assert!(s.blocks_interpolation());
        assert_eq!(s.label(), "duplicate_time;spike;gap_before");
    }

    /// A time written twice: with the same reading in the next row (a repeated row) only the
    /// repeat is set aside and the kept copy named; with the same reading after other rows, or
    /// with different readings, both are, each naming the other; the conflict list
    /// pairs the first copy with every differing later one. Hand-built 6-min record.
    #[test]
    fn duplicate_times_by_their_readings() {
        let t: Vec<f64> = [0.0, 360.0, 360.0, 720.0, 1080.0, 1080.0, 1440.0, 1080.0].to_vec();
        let h = [1.0, 1.1, 1.1, 1.2, 1.3, 1.35, 1.4, 1.3];
        let r = run_qc(&t, &h, &QcThresholds::default());
        assert_eq!(r.flagged(QcFlag::DuplicateTime), vec![2, 4, 5, 7]);
        assert_eq!(
            r.notes_of(2)[0].reason,
            QcReason::DuplicateTime {
                t_s: 360.0,
                kept: 1
            }
        );
        assert_eq!(
            r.notes_of(4)[0].reason,
            QcReason::ConflictingDuplicate {
                t_s: 1080.0,
                other: 5,
                other_level_m: 1.35
            }
        );
        assert_eq!(
            r.notes_of(5)[0].reason,
            QcReason::ConflictingDuplicate {
                t_s: 1080.0,
                other: 4,
                other_level_m: 1.3
            }
        );
        // Sample 7 repeats sample 4's time and reading two rows later, past another time: not
        // a repeated row but a time written again (a clock set back), so both are set aside.
        assert_eq!(
            r.notes_of(7)[0].reason,
            QcReason::DistantDuplicate {
                t_s: 1080.0,
                other: 4
            }
        );
        // The same alone: a time and reading written again after other rows.
        let r2 = run_qc(
            &[0.0, 360.0, 720.0, 360.0],
            &[1.0, 1.1, 1.2, 1.1],
            &QcThresholds::default(),
        );
        assert_eq!(r2.flagged(QcFlag::DuplicateTime), vec![1, 3]);
        assert_eq!(
            r2.notes_of(1)[0].reason,
            QcReason::DistantDuplicate {
                t_s: 360.0,
                other: 3
            }
        );
        assert!(r.flags[1].usable() && !r.flags[4].usable() && !r.flags[5].usable());
        // Timing flags do not block interpolation: the conflicting time is bridged like a
        // missing reading.
        assert!(!r.flags[4].blocks_interpolation());
        assert_eq!(
            conflicting_duplicates(&t, &h),
            vec![DuplicateConflict { first: 4, later: 5 }]
        );
    }

    /// A time earlier than the kept sample before it names that sample, which is not the row
    /// just above it when that row is itself set aside.
    #[test]
    fn a_backward_time_names_the_kept_sample_before_it() {
        let t = [0.0, 360.0, 360.0, 180.0, 720.0];
        let h = [1.0, 1.1, 1.1, 1.1, 1.2];
        let r = run_qc(&t, &h, &QcThresholds::default());
        assert_eq!(
            r.notes_of(3)[0].reason,
            QcReason::EarlierThanPrevious {
                t_s: 180.0,
                by_s: 180.0,
                previous: 1
            }
        );
    }

    /// NaN and infinite readings are set aside as out of band, like a finite reading outside
    /// the band, and counted; the samples around them stay usable.
    #[test]
    fn readings_that_are_not_finite_are_out_of_band() {
        let t: Vec<f64> = (0..12).map(|i| i as f64 * 360.0).collect();
        let mut h: Vec<f64> = (0..12).map(|i| 2.0 + 0.01 * i as f64).collect();
        h[3] = f64::NAN;
        h[6] = f64::INFINITY;
        h[9] = 1e308;
        let th = QcThresholds {
            band_min_m: -8.0,
            band_max_m: 12.0,
            ..QcThresholds::default()
        };
        let r = run_qc(&t, &h, &th);
        assert_eq!(r.flagged(QcFlag::OutOfBand), vec![3, 6, 9]);
        assert_eq!(r.count(QcFlag::OutOfBand), 3);
        assert!(
            matches!(r.notes_of(3)[0].reason, QcReason::NotFinite { level_m } if level_m.is_nan())
        );
        assert_eq!(
            r.notes_of(6)[0].reason,
            QcReason::NotFinite {
                level_m: f64::INFINITY
            }
        );
        assert!(matches!(
            r.notes_of(9)[0].reason,
            QcReason::OutOfBand { .. }
        ));
        assert_eq!(r.usable_count(), 9);
    }
}
