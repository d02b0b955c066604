//! Tide correctors: a zone's water level on a regular time grid (for pipelines that apply tide
//! themselves), and tide models that read correctors back.
//!
//! Owns: [`CorrectorStatus`], [`zone_correctors`] (a zone's tide and standard uncertainty on a
//! grid, each time with its status), [`ZoneSeriesModel`] (tide from per-zone corrector series,
//! linear in time) and [`SoundingTableModel`] (tide looked up per sounding by line and time).

use std::collections::HashMap;
use std::sync::Arc;

use super::locate::ZoneLocator;
use super::reduce::{Query, Scratch, StepSource, TideModel, TideOutcome, TideU};
use super::series::TimeInterpolation;
use super::uncertainty::{tide_budget, GaugeUncertainty, ZoneUncertainty};
use super::zoning::{FeedState, Gauge, Zone};

/// How a corrector value was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum CorrectorStatus {
    /// Every feeding gauge has a sample exactly at its corrected time.
    Observed,
    /// At least one feeding gauge was interpolated between samples (within its maximum gap).
    Interpolated,
    /// The tide rests on gauge samples that `[gap_fill]` filled, or on a zone's feeds
    /// renormalised because one had no level ([`rests_on_filled`]).
    GapFilled,
    /// No value: a feeding gauge has no level at the corrected time.
    Missing,
    /// No value: a feeding gauge's samples around the corrected time enclose one that quality
    /// control set aside (soundings there get status `gauge_flagged`).
    Flagged,
}

impl CorrectorStatus {
    /// Every status, in the order of the summary.
    pub const ALL: [CorrectorStatus; 5] = [
        CorrectorStatus::Observed,
        CorrectorStatus::Interpolated,
        CorrectorStatus::GapFilled,
        CorrectorStatus::Missing,
        CorrectorStatus::Flagged,
    ];

    /// The word written in files.
    pub fn as_str(self) -> &'static str {
        match self {
            CorrectorStatus::Observed => "observed",
            CorrectorStatus::Interpolated => "interpolated",
            CorrectorStatus::GapFilled => "gap_filled",
            CorrectorStatus::Missing => "missing",
            CorrectorStatus::Flagged => "flagged",
        }
    }
    /// Parses the word.
    pub fn parse(s: &str) -> Option<Self> {
        Some(match s {
            "observed" => CorrectorStatus::Observed,
            "interpolated" => CorrectorStatus::Interpolated,
            "gap_filled" => CorrectorStatus::GapFilled,
            "missing" => CorrectorStatus::Missing,
            "flagged" => CorrectorStatus::Flagged,
            _ => return None,
        })
    }
}

/// One corrector value.
#[derive(Debug, Clone, PartialEq)]
pub struct Corrector {
    /// UTC seconds.
    pub t_s: f64,
    /// Tide above chart datum, metres (`None` when missing).
    pub tide_m: Option<f64>,
    /// Standard uncertainty of the tide, metres (`None` when missing or not computed).
    pub u_tide_m: Option<f64>,
    /// The five components of `u_tide_m` in [`super::uncertainty::TIDE_COMPONENTS`] order,
    /// metres (`None` when `u_tide_m` is, or a file of the earlier layout did not carry them).
    pub u_parts_m: Option<[f64; 5]>,
    /// How it was obtained.
    pub status: CorrectorStatus,
    /// For a [`CorrectorStatus::GapFilled`] value, how the tide was filled (the words of the
    /// reduced file's `status_detail`, made by the caller); `None` otherwise.
    pub detail: Option<Arc<str>>,
}

/// Whether a zone tide found with `states` (from [`Zone::tide_at`] or
/// [`Zone::tide_at_renormalising`]) rests on gap-filled samples or on renormalised feeds: a feed
/// left out of the blend, or a feed whose bracketing samples include a filled one. The rule by
/// which a sounding is `gap_filled`.
pub fn rests_on_filled(zone: &Zone, gauges: &[Gauge], states: &[FeedState]) -> bool {
    zone.feeds
        .iter()
        .zip(states)
        .any(|(f, st)| st.missing || gauges[f.gauge].series.fill.bracket_filled(st.level.bracket))
}

/// How each part of a `gap_filled` detail about a feed left out of a renormalised blend begins
/// (the other parts are about filled samples of a gauge). Parts are joined by `"; "`.
pub const RENORMALISED_PART_PREFIX: &str = "feed '";

/// Uncertainty inputs for [`zone_correctors`].
#[derive(Debug, Clone, Copy)]
pub struct CorrectorUncertainty<'a> {
    /// Per gauge.
    pub gauge_u: &'a [GaugeUncertainty],
    /// The zone's.
    pub zone_u: &'a ZoneUncertainty,
    /// Each gauge's rate and curvature.
    pub rates: &'a [super::uncertainty::GaugeSlopes],
}

/// A zone's tide on the grid `t0, t0 + step, …` (n values).
pub fn zone_correctors(
    zone: &Zone,
    gauges: &[Gauge],
    interp: &dyn TimeInterpolation,
    unc: Option<CorrectorUncertainty>,
    t0_s: f64,
    step_s: f64,
    n: usize,
) -> Vec<Corrector> {
    let mut states: Vec<FeedState> = Vec::new();
    (0..n)
        .map(|k| {
            zone_corrector_at(
                zone,
                gauges,
                interp,
                unc,
                t0_s + k as f64 * step_s,
                &mut states,
            )
        })
        .collect()
}

/// A zone's tide at one UTC time, with its status (and standard uncertainty when asked), the
/// feeds never renormalised ([`zone_corrector_with`]).
pub fn zone_corrector_at(
    zone: &Zone,
    gauges: &[Gauge],
    interp: &dyn TimeInterpolation,
    unc: Option<CorrectorUncertainty>,
    t: f64,
    states: &mut Vec<FeedState>,
) -> Corrector {
    zone_corrector_with(zone, gauges, interp, unc, t, states, false)
}

/// A zone's tide at one UTC time, with its status (and standard uncertainty when asked). With
/// `renormalise`, a zone of several feeds where some have no level takes the others
/// ([`Zone::tide_at_renormalising`]), as `ebbwise reduce` does under `[gap_fill]
/// renormalise_feeds`. A value that [`rests_on_filled`] is [`CorrectorStatus::GapFilled`] (its
/// `detail` left for the caller to word); `states` then holds the feeds' states.
pub fn zone_corrector_with(
    zone: &Zone,
    gauges: &[Gauge],
    interp: &dyn TimeInterpolation,
    unc: Option<CorrectorUncertainty>,
    t: f64,
    states: &mut Vec<FeedState>,
    renormalise: bool,
) -> Corrector {
    let found = if renormalise {
        zone.tide_at_renormalising(gauges, interp, t, states)
            .map(|(tide, _)| tide)
    } else {
        zone.tide_at(gauges, interp, t, states)
    };
    match found {
        Err(e) => Corrector {
            t_s: t,
            tide_m: None,
            u_tide_m: None,
            u_parts_m: None,
            status: if matches!(e.why, super::series::NoLevel::Flagged { .. }) {
                CorrectorStatus::Flagged
            } else {
                CorrectorStatus::Missing
            },
            detail: None,
        },
        Ok(tide) => {
            let observed = zone.feeds.iter().zip(states.iter()).all(|(f, st)| {
                if st.missing {
                    return false;
                }
                let shifted = t - f.time_corrector_min * 60.0;
                let s = &gauges[f.gauge].series;
                let i = st.level.bracket;
                s.times_s.get(i) == Some(&shifted) || s.times_s.get(i + 1) == Some(&shifted)
            });
            let b = unc.map(|u| tide_budget(zone, gauges, u.gauge_u, u.zone_u, u.rates, states));
            Corrector {
                t_s: t,
                tide_m: Some(tide),
                u_tide_m: b.map(|b| b.u_tide_m()),
                u_parts_m: b.map(|b| b.components_m()),
                status: if rests_on_filled(zone, gauges, states) {
                    CorrectorStatus::GapFilled
                } else if observed {
                    CorrectorStatus::Observed
                } else {
                    CorrectorStatus::Interpolated
                },
                detail: None,
            }
        }
    }
}

/// Two consecutive rows of a series further apart than its step by more than this are not
/// bridged, seconds. Times are written to the millisecond, so an interval read back can differ
/// from the step by up to 1 ms; 2 ms covers that with a margin.
pub const BRIDGE_TOLERANCE_S: f64 = 0.002;

/// What a corrector series gives at one time.
#[derive(Debug, Clone, PartialEq)]
pub enum SeriesValue {
    /// A tide (interpolated linearly between two rows), with its uncertainty when both rows
    /// carry it and its components.
    Tide {
        /// Tide above chart datum, metres.
        tide_m: f64,
        /// Uncertainty interpolated the same way.
        carried_u: Option<TideU>,
        /// How the tide was gap-filled, when it rests on a `gap_filled` row ([`series_value`]).
        filled: Option<Arc<str>>,
    },
    /// No value: outside the series or next to a row without a tide.
    None {
        /// A neighbouring row is `flagged`.
        flagged: bool,
    },
    /// The rows around the time are further apart than the step: not bridged.
    Unbridged {
        /// Time of the row before, UTC seconds.
        from_s: f64,
        /// Time of the row after, UTC seconds.
        to_s: f64,
    },
}

/// The detail of a `gap_filled` row (a fixed wording when the file gave none), `None` for a row
/// of another status.
fn filled_detail(c: &Corrector) -> Option<Arc<str>> {
    (c.status == CorrectorStatus::GapFilled).then(|| {
        c.detail
            .clone()
            .unwrap_or_else(|| Arc::from("the correction file marks this tide gap_filled"))
    })
}

/// Between two rows `a` and `b`: a tide interpolated from them rests on filled samples when the
/// samples bracketing `a` do (the bracket is the same at every time from `a` up to `b` when the
/// time-corrected samples fall on the grid), or when a feed has no level just after `a` (its gap
/// opens at `a` itself, so `b` says so and `a` does not): then the parts of `b`'s detail about
/// renormalised feeds.
fn filled_between(a: &Corrector, b: &Corrector) -> Option<Arc<str>> {
    if let Some(d) = filled_detail(a) {
        return Some(d);
    }
    let d = filled_detail(b)?;
    let parts: Vec<&str> = d
        .split("; ")
        .filter(|p| p.starts_with(RENORMALISED_PART_PREFIX))
        .collect();
    if parts.is_empty() {
        None
    } else if parts.len() == d.split("; ").count() {
        Some(d)
    } else {
        Some(Arc::from(parts.join("; ")))
    }
}

/// Whether a `gap_filled` row's tide left a feed out (a renormalised blend).
fn has_renormalised(c: &Corrector) -> bool {
    c.status == CorrectorStatus::GapFilled
        && c.detail.as_deref().is_some_and(|d| {
            d.split("; ")
                .any(|p| p.starts_with(RENORMALISED_PART_PREFIX))
        })
}

fn carried(c: &Corrector) -> Option<TideU> {
    Some(TideU {
        u_tide_m: c.u_tide_m?,
        parts_m: c.u_parts_m?,
    })
}

/// The value of a corrector series (sorted by time) at `t_s`: a row's own value at its time;
/// between two rows at most `max_step_s` (+ [`BRIDGE_TOLERANCE_S`]) apart, the tide and each
/// uncertainty interpolated linearly (each uncertainty the larger of the two rows' where one
/// row's blend left a feed out and the other's did not); next to a row without a tide, outside the series, or
/// between rows further apart, none. A tide at a `gap_filled` row's time is filled with that
/// row's detail; between two rows, see [`filled_between`].
pub fn series_value(series: &[Corrector], t_s: f64, max_step_s: f64) -> SeriesValue {
    let i = series.partition_point(|c| c.t_s <= t_s);
    let flagged = |k: Option<usize>| {
        k.and_then(|k| series.get(k))
            .is_some_and(|c| c.status == CorrectorStatus::Flagged)
    };
    let none = SeriesValue::None {
        flagged: flagged(i.checked_sub(1)) || flagged(Some(i)),
    };
    if i == 0 {
        return none;
    }
    let a = &series[i - 1];
    if a.t_s == t_s {
        return match a.tide_m {
            Some(tide_m) => SeriesValue::Tide {
                tide_m,
                carried_u: carried(a),
                filled: filled_detail(a),
            },
            None => none,
        };
    }
    let Some(b) = series.get(i) else {
        return none;
    };
    if b.t_s - a.t_s > max_step_s + BRIDGE_TOLERANCE_S {
        return SeriesValue::Unbridged {
            from_s: a.t_s,
            to_s: b.t_s,
        };
    }
    let (Some(ta), Some(tb)) = (a.tide_m, b.tide_m) else {
        return none;
    };
    let f = (t_s - a.t_s) / (b.t_s - a.t_s);
    let lerp = |x: f64, y: f64| x + (y - x) * f;
    let carried_u = match (carried(a), carried(b)) {
        // At an edge of a renormalised stretch the budget changes between the rows (a feed is
        // left out just after one of them, and the blends' disagreement joins the gauge
        // component): each component is carried as the larger of the two rows', never an
        // interpolation that would halve the step.
        (Some(ua), Some(ub)) if has_renormalised(a) != has_renormalised(b) => {
            let parts_m: [f64; 5] = std::array::from_fn(|k| ua.parts_m[k].max(ub.parts_m[k]));
            Some(TideU {
                u_tide_m: parts_m.iter().map(|x| x * x).sum::<f64>().sqrt(),
                parts_m,
            })
        }
        (Some(ua), Some(ub)) => Some(TideU {
            u_tide_m: lerp(ua.u_tide_m, ub.u_tide_m),
            parts_m: std::array::from_fn(|k| lerp(ua.parts_m[k], ub.parts_m[k])),
        }),
        _ => None,
    };
    SeriesValue::Tide {
        tide_m: lerp(ta, tb),
        carried_u,
        filled: filled_between(a, b),
    }
}

/// Linear interpolation in a corrector series (sorted by time), bridging any interval. Between
/// two values the tide is interpolated; next to a missing value, or outside the series, there is
/// none.
pub fn interpolate_correctors(series: &[Corrector], t_s: f64) -> Option<f64> {
    match series_value(series, t_s, f64::INFINITY) {
        SeriesValue::Tide { tide_m, .. } => Some(tide_m),
        _ => None,
    }
}

/// The most common interval between consecutive rows of a series, seconds (to the
/// millisecond; on a tie the shortest). `None` with fewer than two rows.
pub fn modal_step_s(series: &[Corrector]) -> Option<f64> {
    let mut counts: HashMap<i64, usize> = HashMap::new();
    for w in series.windows(2) {
        *counts
            .entry(((w[1].t_s - w[0].t_s) * 1000.0).round() as i64)
            .or_default() += 1;
    }
    counts
        .into_iter()
        .max_by(|a, b| a.1.cmp(&b.1).then(b.0.cmp(&a.0)))
        .map(|(ms, _)| ms as f64 / 1000.0)
}

/// Tide from per-zone corrector series: the zone from the locator, the tide interpolated in time
/// between rows no further apart than the zone's step.
#[derive(Debug)]
pub struct ZoneSeriesModel<'a> {
    /// Zone polygons (index = zone index).
    pub locator: &'a ZoneLocator,
    /// Corrector series per zone index (empty when the file has none for the zone).
    pub series: &'a [Vec<Corrector>],
    /// Longest interval bridged per zone index, seconds (infinite for a zone with fewer than
    /// two rows and no stated step).
    pub step_s: &'a [f64],
    /// Where the steps come from.
    pub step_from: StepSource,
}

impl TideModel for ZoneSeriesModel<'_> {
    fn tide_at(&self, q: &Query, _s: &mut Scratch) -> TideOutcome {
        let (x, y, t_s) = (q.x, q.y, q.t_s);
        let Some(zone) = self.locator.locate(x, y) else {
            return TideOutcome::Outside;
        };
        match series_value(&self.series[zone], t_s, self.step_s[zone]) {
            SeriesValue::Tide {
                tide_m,
                carried_u,
                filled,
            } => TideOutcome::Tide {
                zone,
                tide_m,
                u: carried_u,
                filled,
            },
            SeriesValue::Unbridged { from_s, to_s } => TideOutcome::Unbridged {
                zone: Some(zone),
                from_s,
                to_s,
                step_s: self.step_s[zone],
                step_from: self.step_from,
            },
            SeriesValue::None { flagged } => TideOutcome::NoCorrection {
                zone: Some(zone),
                why: if flagged {
                    "the correction file marks this zone's tide at this time flagged (gauge samples set aside by quality control)"
                } else {
                    "the correction file has no value for this zone at this time"
                },
                flagged,
            },
        }
    }
}

/// One survey line's series in a per-line correction file.
#[derive(Debug, Default, Clone)]
pub struct LineSeries {
    /// Correctors sorted by time.
    pub series: Vec<Corrector>,
    /// Zone index of each corrector.
    pub zones: Vec<Option<usize>>,
    /// Longest interval bridged, seconds.
    pub step_s: f64,
}

/// A tide model that first locates the sounding in the zoning: a sounding outside every zone is
/// `Outside`, whatever `inner` would give it (a per-line series carries one zone per time, so a
/// sounding of the line outside the zoning would otherwise take the line's tide).
pub struct LocatedFirst<'a> {
    /// Zone polygons in the soundings' CRS.
    pub locator: &'a ZoneLocator,
    /// The model asked for soundings inside a zone.
    pub inner: &'a dyn TideModel,
}

impl TideModel for LocatedFirst<'_> {
    fn tide_at(&self, q: &Query, s: &mut Scratch) -> TideOutcome {
        if self.locator.locate(q.x, q.y).is_none() {
            return TideOutcome::Outside;
        }
        self.inner.tide_at(q, s)
    }
}

/// Tide from per-survey-line corrector series: looked up by the sounding's line and
/// interpolated in time along it (between rows no further apart than the step); the zone is the
/// one of the nearest corrector time.
#[derive(Debug)]
pub struct LineSeriesModel {
    /// Per line.
    pub lines: HashMap<String, LineSeries>,
    /// Where the steps come from.
    pub step_from: StepSource,
}

impl TideModel for LineSeriesModel {
    fn tide_at(&self, q: &Query, _s: &mut Scratch) -> TideOutcome {
        let (t_s, line) = (q.t_s, q.line);
        let Some(ls) = self.lines.get(line) else {
            return TideOutcome::NoCorrection {
                zone: None,
                why: "the correction file has no series for this survey line",
                flagged: false,
            };
        };
        let series = &ls.series;
        let i = series.partition_point(|c| c.t_s <= t_s);
        let nearest = match (i.checked_sub(1), series.get(i)) {
            (Some(a), Some(b)) if (t_s - series[a].t_s) > (b.t_s - t_s) => Some(i),
            (Some(a), _) => Some(a),
            (None, Some(_)) => Some(i),
            (None, None) => None,
        };
        let zone = nearest.and_then(|k| ls.zones[k]);
        match (series_value(series, t_s, ls.step_s), zone) {
            (
                SeriesValue::Tide {
                    tide_m,
                    carried_u,
                    filled,
                },
                Some(zone),
            ) => TideOutcome::Tide {
                zone,
                tide_m,
                u: carried_u,
                filled,
            },
            (SeriesValue::Unbridged { from_s, to_s }, _) => TideOutcome::Unbridged {
                zone,
                from_s,
                to_s,
                step_s: ls.step_s,
                step_from: self.step_from,
            },
            (v, _) => {
                let flagged = matches!(v, SeriesValue::None { flagged: true });
                TideOutcome::NoCorrection {
                    zone,
                    why: if flagged {
                        "the correction file marks this line's tide at this time flagged (gauge samples set aside by quality control)"
                    } else {
                        "the correction file has no value for this line at this time"
                    },
                    flagged,
                }
            }
        }
    }
}

/// What a per-sounding correction row says.
#[derive(Debug, Clone, PartialEq)]
pub enum SoundingCorrection {
    /// A tide for the sounding, in a zone.
    Tide {
        /// Zone index.
        zone: usize,
        /// Tide above chart datum, metres.
        tide_m: f64,
        /// Its uncertainty, when the row carries it and its components.
        carried_u: Option<TideU>,
        /// The row's status was `gap_filled`: its detail (how the tide was filled).
        filled: Option<Arc<str>>,
    },
    /// The sounding was outside every zone.
    Outside,
    /// No tide (no gauge data, flagged gauge data, or the row was bad).
    None {
        /// Zone index, when known.
        zone: Option<usize>,
        /// The sounding's status was `gauge_flagged`.
        flagged: bool,
    },
}

/// Key of a per-sounding correction: survey line and time in whole microseconds.
pub fn sounding_key(line: &str, t_s: f64) -> (String, i64) {
    (line.to_string(), (t_s * 1e6).round() as i64)
}

/// Soundings whose per-sounding key ([`sounding_key`]: line and time) is shared with another
/// sounding that lies in a different zone (or outside every zone), as the beams of one
/// multibeam ping straddling a zone edge do. Such keys cannot tell the soundings' tides apart,
/// so a per-sounding correction file cannot hold them; a zone's tide at one time is one value,
/// so soundings sharing a key and a zone never clash.
///
/// Memory is one entry per distinct key: a 64-bit hash of the line and the time in whole
/// microseconds with the zone (two different keys share a hash with probability about
/// `n² / 2⁶⁵`, e.g. 3 × 10⁻⁴ for 10⁸ soundings, which could only add a clash).
#[derive(Debug, Default)]
pub struct KeyClashes {
    zone_of: HashMap<u64, u64>,
    /// Soundings whose key was met before with a different zone.
    pub soundings: u64,
    /// Distinct keys with soundings in more than one zone.
    pub keys: u64,
    clashed: std::collections::HashSet<u64>,
    /// The first clash met: line and time, UTC seconds.
    pub first: Option<(String, f64)>,
}

impl KeyClashes {
    /// Adds one sounding: its line, time (UTC seconds) and zone (`None`: outside every zone).
    pub fn add(&mut self, line: &str, t_s: f64, zone: Option<usize>) {
        self.add_value(line, t_s, zone.map_or(0, |z| z as u64 + 1));
    }

    /// Adds one row of a per-sounding correction file: its line, time, zone and tide as
    /// written. Rows sharing a key clash when their zones or their tides differ (a continuous
    /// tide gives the beams of one ping different tides even within a zone).
    pub fn add_row(&mut self, line: &str, t_s: f64, zone: Option<usize>, tide: &str) {
        use std::hash::{Hash, Hasher};
        let mut h = std::collections::hash_map::DefaultHasher::new();
        zone.hash(&mut h);
        tide.hash(&mut h);
        self.add_value(line, t_s, h.finish());
    }

    fn add_value(&mut self, line: &str, t_s: f64, z: u64) {
        use std::hash::{Hash, Hasher};
        let (line_key, micros) = (line, (t_s * 1e6).round() as i64);
        let mut h = std::collections::hash_map::DefaultHasher::new();
        line_key.hash(&mut h);
        micros.hash(&mut h);
        let key = h.finish();
        match self.zone_of.entry(key) {
            std::collections::hash_map::Entry::Vacant(e) => {
                e.insert(z);
            }
            std::collections::hash_map::Entry::Occupied(e) => {
                if *e.get() != z {
                    self.soundings += 1;
                    if self.clashed.insert(key) {
                        self.keys += 1;
                    }
                    self.first.get_or_insert_with(|| (line.to_string(), t_s));
                }
            }
        }
    }
}

/// Tide looked up per sounding by its survey line and time.
#[derive(Debug, Default)]
pub struct SoundingTableModel {
    /// Corrections by key.
    pub table: HashMap<(String, i64), SoundingCorrection>,
}

impl TideModel for SoundingTableModel {
    fn tide_at(&self, q: &Query, _s: &mut Scratch) -> TideOutcome {
        let (t_s, line) = (q.t_s, q.line);
        match self.table.get(&sounding_key(line, t_s)) {
            Some(SoundingCorrection::Tide {
                zone,
                tide_m,
                carried_u,
                filled,
            }) => TideOutcome::Tide {
                zone: *zone,
                tide_m: *tide_m,
                u: *carried_u,
                filled: filled.clone(),
            },
            Some(SoundingCorrection::Outside) => TideOutcome::Outside,
            Some(SoundingCorrection::None { zone, flagged }) => TideOutcome::NoCorrection {
                zone: *zone,
                why: if *flagged {
                    "the correction file gives no tide for this sounding: its gauge data were flagged by quality control"
                } else {
                    "the correction file gives no tide for this sounding"
                },
                flagged: *flagged,
            },
            None => TideOutcome::NoCorrection {
                zone: None,
                why: "the correction file has no row for this line and time",
                flagged: false,
            },
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Beams of one ping in two zones clash; beams in one zone, or pings at other times or on
    /// other lines, do not.
    #[test]
    fn key_clashes_count_pings_across_a_zone_edge() {
        let mut c = KeyClashes::default();
        for beam in 0..10 {
            c.add("L1", 100.25, Some(usize::from(beam >= 6)));
        }
        for beam in 0..10 {
            c.add("L1", 100.5, Some(0));
            c.add("L2", 100.25, if beam < 3 { None } else { Some(0) });
        }
        c.add("L3", 100.25, Some(2));
        assert_eq!((c.keys, c.soundings), (2, 11));
        assert_eq!(c.first, Some(("L1".to_string(), 100.25)));
    }

    /// Rows of a per-sounding file clash on a shared key when their tides differ even in one
    /// zone (a continuous tide's beams), and not when zone and tide agree.
    #[test]
    fn rows_with_one_key_and_other_tides_clash() {
        let mut c = KeyClashes::default();
        c.add_row("L1", 100.25, Some(0), "1.2345");
        c.add_row("L1", 100.25, Some(0), "1.2345");
        assert_eq!((c.keys, c.soundings), (0, 0));
        c.add_row("L1", 100.25, Some(0), "1.2351");
        c.add_row("L1", 100.50, Some(0), "1.2400");
        assert_eq!((c.keys, c.soundings), (1, 1));
    }

    #[test]
    fn every_status_reads_back_and_indexes_its_count() {
        for (i, s) in CorrectorStatus::ALL.iter().enumerate() {
            assert_eq!(CorrectorStatus::parse(s.as_str()), Some(*s));
            // Summaries count statuses in an array indexed by the discriminant.
            assert_eq!(*s as usize, i);
        }
        assert_eq!(
            CorrectorStatus::parse("gap_filled"),
            Some(CorrectorStatus::GapFilled)
        );
        assert_eq!(CorrectorStatus::parse("filled"), None);
    }
    use crate::compute::series::{LevelSeries, Linear};
    use crate::compute::zoning::{GaugeFeed, MeanLevelForm};

    fn gauge() -> Gauge {
        Gauge {
            id: "g".into(),
            series: LevelSeries {
                times_s: vec![0.0, 360.0, 720.0, 4320.0, 4680.0],
                heights_m: vec![1.0, 1.6, 1.3, 2.0, 2.1],
                max_gap_s: 1800.0,
                ..Default::default()
            },
            mean_level_above_datum_m: 1.5,
        }
    }

    fn zone(dt_min: f64) -> Zone {
        Zone {
            id: "Z".into(),
            feeds: vec![GaugeFeed {
                gauge: 0,
                weight: 1.0,
                time_corrector_min: dt_min,
                range_ratio: 1.0,
            }],
            mean_level: MeanLevelForm::Scaled,
        }
    }

    #[test]
    fn statuses_on_the_grid_and_missing_never_invented() {
        let g = vec![gauge()];
        let c = zone_correctors(&zone(0.0), &g, &Linear, None, 0.0, 60.0, 80);
        assert_eq!(c[0].status, CorrectorStatus::Observed);
        assert_eq!(c[6].status, CorrectorStatus::Observed);
        assert_eq!(c[3].status, CorrectorStatus::Interpolated);
        assert!((c[3].tide_m.unwrap() - 1.3).abs() < 1e-12);
        // 720 s … 4320 s is a 60-min gap: minutes 13 … 71 are missing, with no value.
        for (k, x) in c.iter().enumerate().take(72).skip(13) {
            assert_eq!(x.status, CorrectorStatus::Missing, "minute {k}");
            assert_eq!(x.tide_m, None);
        }
        assert_eq!(c[72].status, CorrectorStatus::Observed);
        // After the record ends: missing.
        assert_eq!(c[79].status, CorrectorStatus::Missing);
        // A 30-s time corrector: no grid time lands on a sample.
        let c = zone_correctors(&zone(0.5), &g, &Linear, None, 60.0, 60.0, 5);
        assert!(c.iter().all(|x| x.status == CorrectorStatus::Interpolated));
    }

    #[test]
    fn interpolation_between_correctors_stops_at_missing_values() {
        let g = vec![gauge()];
        let c = zone_correctors(&zone(0.0), &g, &Linear, None, 0.0, 60.0, 80);
        assert!((interpolate_correctors(&c, 90.0).unwrap() - 1.15).abs() < 1e-12);
        assert_eq!(interpolate_correctors(&c, 750.0), None);
        assert_eq!(interpolate_correctors(&c, -1.0), None);
        assert_eq!(interpolate_correctors(&c, 720.0), Some(1.3));
    }
    fn row(t_s: f64, tide: f64, u: f64) -> Corrector {
        Corrector {
            t_s,
            tide_m: Some(tide),
            u_tide_m: Some(u),
            u_parts_m: Some([u, 0.0, 0.0, 0.0, 0.0]),
            status: CorrectorStatus::Interpolated,
            detail: None,
        }
    }

    #[test]
    fn rows_further_apart_than_the_step_are_not_bridged() {
        // 1-min rows, then a 3-min interval (two rows removed), then 1-min rows again.
        let s = vec![
            row(0.0, 1.0, 0.10),
            row(60.0, 1.2, 0.20),
            row(240.0, 1.8, 0.30),
            row(300.0, 2.0, 0.40),
        ];
        assert_eq!(modal_step_s(&s), Some(60.0));
        // Within a step: the tide and each uncertainty interpolated linearly.
        match series_value(&s, 30.0, 60.0) {
            SeriesValue::Tide {
                tide_m, carried_u, ..
            } => {
                assert!((tide_m - 1.1).abs() < 1e-12);
                let c = carried_u.unwrap();
                assert!((c.u_tide_m - 0.15).abs() < 1e-12);
                assert!((c.parts_m[0] - 0.15).abs() < 1e-12);
            }
            v => panic!("{v:?}"),
        }
        // Inside the 3-min interval: not bridged, with both times.
        assert_eq!(
            series_value(&s, 150.0, 60.0),
            SeriesValue::Unbridged {
                from_s: 60.0,
                to_s: 240.0
            }
        );
        // At a row's own time its value stands, whatever its neighbours.
        assert!(matches!(
            series_value(&s, 240.0, 60.0),
            SeriesValue::Tide { tide_m, .. } if tide_m == 1.8
        ));
        // A rounding of the written times (1 ms) is within the tolerance.
        let t = vec![row(0.0, 1.0, 0.1), row(60.001, 1.2, 0.1)];
        assert!(matches!(
            series_value(&t, 30.0, 60.0),
            SeriesValue::Tide { .. }
        ));
        let t = vec![row(0.0, 1.0, 0.1), row(60.003, 1.2, 0.1)];
        assert!(matches!(
            series_value(&t, 30.0, 60.0),
            SeriesValue::Unbridged { .. }
        ));
        // With no step limit the interval is bridged (the tide of the earlier reader).
        assert!((interpolate_correctors(&s, 150.0).unwrap() - 1.5).abs() < 1e-12);
        // A row without components: the tide, but no carried uncertainty.
        let mut u = s.clone();
        u[1].u_parts_m = None;
        assert!(matches!(
            series_value(&u, 30.0, 60.0),
            SeriesValue::Tide {
                carried_u: None,
                ..
            }
        ));
        assert_eq!(modal_step_s(&s[..1]), None);
    }

    /// A one-feed zone on a record whose samples at 120 s and 180 s were filled: a grid time is
    /// `gap_filled` exactly when a sounding at that time would be (its bracketing samples include
    /// a filled one, the rule of `FillMarks::bracket_filled`); the others keep their statuses.
    #[test]
    fn a_value_on_filled_samples_is_gap_filled() {
        let mut g = gauge();
        g.series.times_s = vec![0.0, 60.0, 120.0, 180.0, 240.0, 300.0];
        g.series.heights_m = vec![1.0, 1.1, 1.2, 1.3, 1.4, 1.5];
        g.series.fill.filled = vec![false, false, true, true, false, false];
        g.series.fill.u_fill_m = vec![0.0, 0.0, 0.02, 0.02, 0.0, 0.0];
        let g = vec![g];
        let c = zone_correctors(&zone(0.0), &g, &Linear, None, 0.0, 30.0, 11);
        let words: Vec<&str> = c.iter().map(|x| x.status.as_str()).collect();
        // Brackets (by sample index): 0-1, 0-1, 1-2, 1-2, 2-3, 2-3, 3-4, 3-4, 4-5, 4-5, 4-5.
        assert_eq!(
            words,
            [
                "observed",
                "interpolated",
                "gap_filled",
                "gap_filled",
                "gap_filled",
                "gap_filled",
                "gap_filled",
                "gap_filled",
                "observed",
                "interpolated",
                "observed"
            ]
        );
        // The tide is the one the samples give, filled or not: 1.0 + 0.1 per minute.
        assert!((c[5].tide_m.unwrap() - 1.25).abs() < 1e-12);
        assert!(c.iter().all(|x| x.detail.is_none()), "worded by the caller");
    }

    /// Two feeds, one without samples after 600 s: renormalised, the zone keeps a tide there
    /// from the other (`gap_filled`); without renormalisation the value is missing.
    #[test]
    fn renormalised_feeds_give_a_gap_filled_value_and_missing_without() {
        let a = gauge();
        let mut b = gauge();
        b.id = "h".into();
        b.series.times_s = vec![0.0, 300.0, 600.0];
        b.series.heights_m = vec![1.0, 1.0, 1.0];
        let g = vec![a, b];
        let mut z = zone(0.0);
        z.feeds.push(GaugeFeed {
            gauge: 1,
            weight: 1.0,
            time_corrector_min: 0.0,
            range_ratio: 1.0,
        });
        for f in &mut z.feeds {
            f.weight = 0.5;
        }
        let mut st = Vec::new();
        let c = zone_corrector_with(&z, &g, &Linear, None, 720.0, &mut st, true);
        assert_eq!(c.status, CorrectorStatus::GapFilled);
        // The first feed alone, weight renormalised to 1: its sample at 720 s, 1.3 m.
        assert!((c.tide_m.unwrap() - 1.3).abs() < 1e-12);
        assert!(st[1].missing);
        let c = zone_corrector_with(&z, &g, &Linear, None, 720.0, &mut st, false);
        assert_eq!(c.status, CorrectorStatus::Missing);
        // Both feeds present (0 s): observed, as without renormalisation.
        let c = zone_corrector_with(&z, &g, &Linear, None, 0.0, &mut st, true);
        assert_eq!(c.status, CorrectorStatus::Observed);
    }

    fn filled_row(t_s: f64, tide: f64, detail: Option<&str>) -> Corrector {
        Corrector {
            status: if detail.is_some() {
                CorrectorStatus::GapFilled
            } else {
                CorrectorStatus::Interpolated
            },
            detail: detail.map(Arc::from),
            ..row(t_s, tide, 0.1)
        }
    }

    fn filled_at(series: &[Corrector], t_s: f64) -> Option<String> {
        match series_value(series, t_s, 60.0) {
            SeriesValue::Tide { filled, .. } => filled.map(|d| d.to_string()),
            v => panic!("{v:?}"),
        }
    }

    /// Between two rows the tide is filled when the earlier row is (its detail), or when the
    /// later row has a renormalised feed (only those parts of its detail: a gap that opens at the
    /// earlier row's own time); at a row's time, that row's detail.
    #[test]
    fn a_filled_row_carries_its_detail_to_the_soundings_it_reaches() {
        let fill = "gauge 'g' level filled by neighbour from gauge 'k' across 2026-06-14T13:10:00Z to 2026-06-14T14:00:00Z";
        let renorm = "feed 'h' has no level: tide from g with weights renormalised";
        let both = format!("{fill}; {renorm}");
        let s = vec![
            filled_row(0.0, 1.0, None),
            filled_row(60.0, 1.1, Some(fill)),
            filled_row(120.0, 1.2, None),
            filled_row(180.0, 1.3, Some(&both)),
            filled_row(240.0, 1.4, Some(renorm)),
            filled_row(300.0, 1.5, None),
        ];
        // Before a row whose samples were filled: not filled (the bracket is the earlier one).
        assert_eq!(filled_at(&s, 30.0), None);
        assert_eq!(filled_at(&s, 60.0).as_deref(), Some(fill));
        assert_eq!(filled_at(&s, 90.0).as_deref(), Some(fill));
        // After an unfilled row, before one with both kinds: the renormalised part only.
        assert_eq!(filled_at(&s, 150.0).as_deref(), Some(renorm));
        assert_eq!(filled_at(&s, 180.0).as_deref(), Some(both.as_str()));
        assert_eq!(filled_at(&s, 210.0).as_deref(), Some(both.as_str()));
        assert_eq!(filled_at(&s, 270.0).as_deref(), Some(renorm));
        assert_eq!(filled_at(&s, 300.0), None);
        // Between a renormalised row and one that is not, each uncertainty is the larger of the
        // two rows' (u 0.1 everywhere here but at 240 s); elsewhere interpolated.
        let mut w = s.clone();
        w[4].u_tide_m = Some(0.3);
        w[4].u_parts_m = Some([0.3, 0.0, 0.0, 0.0, 0.0]);
        let u_at = |t_s: f64| match series_value(&w, t_s, 60.0) {
            SeriesValue::Tide {
                carried_u: Some(c), ..
            } => (c.u_tide_m, c.parts_m[0]),
            v => panic!("{v:?}"),
        };
        // 210 s: rows at 180 s and 240 s both renormalised, interpolated half-way.
        assert!((u_at(210.0).0 - 0.2).abs() < 1e-12);
        // 270 s: 240 s renormalised, 300 s not: the larger.
        assert_eq!(u_at(270.0), (0.3, 0.3));
        // 150 s: 120 s not, 180 s renormalised: both 0.1.
        assert_eq!(u_at(150.0), (0.1, 0.1));
        // A gap_filled row without a detail (a file edited by hand) still marks the tide.
        let mut t = s.clone();
        t[1].detail = None;
        assert_eq!(
            filled_at(&t, 90.0).as_deref(),
            Some("the correction file marks this tide gap_filled")
        );
    }
}
