//! Reduction of one sounding to chart datum, and the spatial tide models behind it.
//!
//! Owns: the [`TideModel`] trait (a spatial tide method is a value that gives its tide and its
//! uncertainty budget: discrete zoning here, the continuous fields in `compute::continuous`,
//! correction files in `compute::correctors`), the [`DiscreteZoning`] model, [`SoundingStatus`] and [`reduce_depth`].
//!
//! Reduced depth = observed depth − tide. Depths positive down, tide positive up; a negative
//! reduced depth is a drying height and is kept.

use super::locate::ZoneLocator;
use super::series::TimeInterpolation;
use super::uncertainty::{tide_budget, GaugeSlopes, GaugeUncertainty, ZoneUncertainty};
use super::zoning::{FeedState, Gauge, NoZoneTide, Zone};

/// What became of one input row. Every row of every input gets exactly one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
#[non_exhaustive]
pub enum SoundingStatus {
    /// Reduced to chart datum.
    Reduced,
    /// Reduced to chart datum with a tide that rests on gap-filled gauge samples, or on a zone's
    /// feeds renormalised because one had no level (`[gap_fill]`).
    GapFilled,
    /// The position is outside every zone of the zoning.
    OutsideZoning,
    /// The zone's gauge(s) have no level at the (shifted) time: before or after the record, or
    /// inside a gap longer than the gauge's maximum gap.
    NoGaugeData,
    /// The zone's tide would depend on a stretch of a gauge record that quality control flagged:
    /// a flagged sample lies between the samples that bracket the (shifted) time.
    GaugeFlagged,
    /// The row could not be read: a field is missing, not a number, not finite, or a time is
    /// malformed or has no UTC offset.
    BadInput,
}

/// Number of sounding statuses.
pub const N_STATUS: usize = 6;

impl SoundingStatus {
    /// All statuses, in report order.
    pub const ALL: [SoundingStatus; N_STATUS] = [
        SoundingStatus::Reduced,
        SoundingStatus::GapFilled,
        SoundingStatus::OutsideZoning,
        SoundingStatus::NoGaugeData,
        SoundingStatus::GaugeFlagged,
        SoundingStatus::BadInput,
    ];

    /// The word written in the `status` column.
    pub const fn as_str(self) -> &'static str {
        match self {
            SoundingStatus::Reduced => "reduced",
            SoundingStatus::GapFilled => "gap_filled",
            SoundingStatus::OutsideZoning => "outside_zoning",
            SoundingStatus::NoGaugeData => "no_gauge_data",
            SoundingStatus::GaugeFlagged => "gauge_flagged",
            SoundingStatus::BadInput => "bad_input",
        }
    }

    /// Index into [`SoundingStatus::ALL`].
    pub fn index(self) -> usize {
        self as usize
    }
}

/// Rows per status, serialised as an object `{"reduced": n, "outside_zoning": n, …}` in status
/// order.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct StatusCounts(pub [u64; N_STATUS]);

impl StatusCounts {
    /// Rows with a status.
    pub fn get(&self, s: SoundingStatus) -> u64 {
        self.0[s.index()]
    }
    /// All rows.
    pub fn total(&self) -> u64 {
        self.0.iter().sum()
    }
    /// (status word, rows) in status order.
    pub fn iter(&self) -> impl Iterator<Item = (&'static str, u64)> + '_ {
        SoundingStatus::ALL
            .iter()
            .map(|s| (s.as_str(), self.0[s.index()]))
    }
    /// Adds another count.
    pub fn add(&mut self, o: &StatusCounts) {
        for (a, b) in self.0.iter_mut().zip(o.0) {
            *a += b;
        }
    }
}

impl serde::Serialize for StatusCounts {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut m = ser.serialize_map(Some(SoundingStatus::ALL.len()))?;
        for (k, v) in self.iter() {
            m.serialize_entry(k, &v)?;
        }
        m.end()
    }
}

/// Where and when a tide is wanted: one sounding.
#[derive(Debug, Clone, Copy)]
pub struct Query<'a> {
    /// Easting or longitude, in the plane the model was built for.
    pub x: f64,
    /// Northing or latitude, in the plane the model was built for.
    pub y: f64,
    /// UTC time, seconds since the Unix epoch.
    pub t_s: f64,
    /// The sounding's survey line (used by models keyed by sounding).
    pub line: &'a str,
}

/// Scratch space a model reuses across calls on one thread. The caller clears it before each
/// call ([`Scratch::clear`]); after a [`TideOutcome::Tide`], `states` holds the gauge states the
/// tide rests on (empty for a tide carried from a correction file), which is how the run tells
/// a gap-filled tide from the gauges, whatever the model.
#[derive(Debug, Default, Clone)]
pub struct Scratch {
    /// Gauge states the tide used, one per gauge (or feed) in the model's order.
    pub states: Vec<FeedState>,
    /// Interpolation weights (station index, weight), for models on a field.
    pub weights: Vec<(usize, f64)>,
    /// A second set of weights (blend index, weight), for models that blend gauges apart
    /// from the field's stations.
    pub blend: Vec<(usize, f64)>,
    /// The triangle of a field the previous place fell in (a search hint, kept across calls).
    pub face: Option<[usize; 3]>,
}

impl Scratch {
    /// Empties the scratch for the next call.
    pub fn clear(&mut self) {
        self.states.clear();
        self.weights.clear();
        self.blend.clear();
    }
}

/// The tide a model found at a place and time.
#[derive(Debug, Clone, PartialEq)]
pub enum TideOutcome {
    /// Tide above chart datum in a zone.
    Tide {
        /// Zone index (the reporting unit the sounding lies in).
        zone: usize,
        /// Tide above chart datum, metres, positive up.
        tide_m: f64,
        /// The tide's standard uncertainty and its components: computed by the model from its
        /// inputs, or as a correction file carries it; `None` when the run has no uncertainty
        /// inputs (or the source has none).
        u: Option<TideU>,
        /// A source that says the tide rests on gap-filled gauge samples (a correction file's
        /// `gap_filled` row) gives how, in the words of `status_detail`; `None` from a model
        /// that reads the gauges (the run tells a filled tide from the gauge states in the
        /// [`Scratch`]).
        filled: Option<std::sync::Arc<str>>,
    },
    /// The place is outside the model's area.
    Outside,
    /// The place is in a zone but a gauge has no level at the needed time.
    NoData {
        /// Zone index.
        zone: usize,
        /// Details.
        why: NoZoneTide,
    },
    /// A correction-based series has values on both sides of the time but further apart than
    /// its step: the tide is not interpolated across the interval.
    Unbridged {
        /// Zone index, when known.
        zone: Option<usize>,
        /// Time of the value before, UTC seconds.
        from_s: f64,
        /// Time of the value after, UTC seconds.
        to_s: f64,
        /// The longest interval bridged, seconds (the series' step).
        step_s: f64,
        /// Where the step comes from.
        step_from: StepSource,
    },
    /// A model has no tide for the sounding.
    NoCorrection {
        /// Zone index, when known.
        zone: Option<usize>,
        /// Why.
        why: &'static str,
        /// The source marks the tide there as resting on flagged gauge samples.
        flagged: bool,
    },
}

/// The standard uncertainty of a tide: the combined value and its five components in
/// [`super::uncertainty::TIDE_COMPONENTS`] order (metres, 1σ).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TideU {
    /// Combined standard uncertainty of the tide, metres.
    pub u_tide_m: f64,
    /// Components, metres (standard uncertainties).
    pub parts_m: [f64; 5],
}

impl From<super::uncertainty::TideBudget> for TideU {
    fn from(b: super::uncertainty::TideBudget) -> TideU {
        TideU {
            u_tide_m: b.u_tide_m(),
            parts_m: b.components_m(),
        }
    }
}

/// Where the step of a correction series comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StepSource {
    /// The file's sidecar states it (`step_min`).
    Sidecar,
    /// The most common interval between the series' own consecutive rows (no sidecar).
    Series,
}

/// A spatial tide model: tide above chart datum, with its uncertainty budget, at any place and
/// time of its area. Discrete zoning, the continuous fields and the correction files are all
/// values of this trait; the reduction loop knows none of them by name.
pub trait TideModel: Sync {
    /// Tide for the sounding `q`. `s` is scratch space, cleared by the caller; on a tide from
    /// the gauges it receives the gauge states used.
    fn tide_at(&self, q: &Query, s: &mut Scratch) -> TideOutcome;
}

/// Uncertainty inputs of a model that reads the gauges (zoning or field).
#[derive(Debug, Clone, Copy)]
pub struct GaugeTideU<'a> {
    /// Per gauge, gauge order.
    pub gauge_u: &'a [GaugeUncertainty],
    /// Per zone, zone order.
    pub zone_u: &'a [ZoneUncertainty],
    /// Each gauge's rate of change and curvature (for the timing term).
    pub rates: &'a [GaugeSlopes],
}

/// Discrete tidal zoning: polygons, each with its correctors.
#[derive(Debug)]
pub struct DiscreteZoning<'a> {
    /// Zones in file order (index = locator index).
    pub zones: &'a [Zone],
    /// Gauges referenced by the zones' feeds.
    pub gauges: &'a [Gauge],
    /// Polygons of the zones, in the soundings' plane.
    pub locator: &'a ZoneLocator,
    /// Time interpolation method for the gauge records.
    pub interp: &'a dyn TimeInterpolation,
    /// A zone fed by several gauges, one without a level, takes the others with their weights
    /// renormalised ([`Zone::tide_at_renormalising`]; `[gap_fill] renormalise_feeds`).
    pub renormalise: bool,
    /// Uncertainty inputs; `None`: no budget.
    pub unc: Option<GaugeTideU<'a>>,
}

impl TideModel for DiscreteZoning<'_> {
    fn tide_at(&self, q: &Query, s: &mut Scratch) -> TideOutcome {
        let Some(zone) = self.locator.locate(q.x, q.y) else {
            return TideOutcome::Outside;
        };
        let z = &self.zones[zone];
        let states = &mut s.states;
        let found = if self.renormalise {
            z.tide_at_renormalising(self.gauges, self.interp, q.t_s, states)
                .map(|(t, _)| t)
        } else {
            z.tide_at(self.gauges, self.interp, q.t_s, states)
        };
        match found {
            // A tide that is not a finite number is never applied (the zoning's bounds make it
            // unlikely; a huge stated mean level could still overflow).
            Ok(tide_m) if !tide_m.is_finite() => TideOutcome::NoCorrection {
                zone: Some(zone),
                why: "the zone tide is not a finite number: check the zone's correctors and the gauges' mean levels",
                flagged: false,
            },
            Ok(tide_m) => TideOutcome::Tide {
                zone,
                tide_m,
                u: self.unc.map(|u| {
                    tide_budget(
                        z,
                        self.gauges,
                        u.gauge_u,
                        &u.zone_u[zone],
                        u.rates,
                        states,
                    )
                    .into()
                }),
                filled: None,
            },
            Err(why) => TideOutcome::NoData { zone, why },
        }
    }
}

/// Resolution at which the tide is applied: 0.1 mm, the resolution every output writes it with.
pub const TIDE_RESOLUTION_DECIMALS: u32 = 4;

/// The tide as it is applied and written: `tide_m` rounded to [`TIDE_RESOLUTION_DECIMALS`]
/// decimals, half away from zero (the rule of the fixed-decimal columns). Subtracting this rather
/// than the unrounded tide (a change of at most 0.05 mm) makes the written columns add up — for an
/// observed depth with at most 4 decimals, written `tide_m` + `reduced_depth_m` is the observed
/// depth exactly — and makes a reduction from a correction file, which holds the written tide,
/// identical to the direct one. A value too large to round is returned unchanged.
///
/// # Units
/// Metres above chart datum, positive up.
pub fn applied_tide_m(tide_m: f64) -> f64 {
    const SCALE: f64 = 1e4;
    let scaled = tide_m * SCALE;
    if !scaled.is_finite() || scaled.abs() >= 1.0e15 {
        return tide_m;
    }
    scaled.round() / SCALE
}

/// Reduced depth below chart datum from an observed depth below the water surface.
///
/// # Units
/// Metres. `observed_depth_m` positive down, `tide_m` positive up (above chart datum); the result
/// is positive down, negative for a drying height.
#[inline]
pub fn reduce_depth(observed_depth_m: f64, tide_m: f64) -> f64 {
    observed_depth_m - tide_m
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::series::{LevelSeries, Linear};
    use crate::compute::zoning::{GaugeFeed, MeanLevelForm};
    use geo::{polygon, MultiPolygon};

    #[test]
    fn the_applied_tide_is_the_written_one() {
        // Half away from zero at the fifth decimal (the fixed-decimal columns' rule).
        assert_eq!(applied_tide_m(2.48075), 2.4808);
        assert_eq!(applied_tide_m(-0.00005), -0.0001);
        assert_eq!(applied_tide_m(1.23456789), 1.2346);
        // A depth with two decimals minus the applied tide lies on the 0.1-mm grid.
        let reduced = reduce_depth(10.93, applied_tide_m(3.410_149));
        assert!(
            (reduced * 1e4 - (reduced * 1e4).round()).abs() < 1e-6,
            "{reduced}"
        );
        assert!(applied_tide_m(f64::INFINITY).is_infinite());
    }

    #[test]
    fn drying_heights_are_kept_negative() {
        assert_eq!(reduce_depth(0.4, 1.1), 0.4 - 1.1);
        assert!(reduce_depth(0.4, 1.1) < 0.0);
    }

    #[test]
    fn model_gives_each_outcome() {
        let gauges = vec![Gauge {
            id: "A".into(),
            series: LevelSeries {
                times_s: vec![0.0, 600.0],
                heights_m: vec![1.0, 2.0],
                max_gap_s: 1800.0,
                ..Default::default()
            },
            mean_level_above_datum_m: 1.5,
        }];
        let zones = vec![Zone {
            id: "Z".into(),
            feeds: vec![GaugeFeed {
                gauge: 0,
                weight: 1.0,
                time_corrector_min: 0.0,
                range_ratio: 1.0,
            }],
            mean_level: MeanLevelForm::Scaled,
        }];
        let loc = ZoneLocator::new(vec![MultiPolygon(vec![polygon![
            (x: 0.0, y: 0.0), (x: 1.0, y: 0.0), (x: 1.0, y: 1.0), (x: 0.0, y: 0.0)
        ]])]);
        let m = DiscreteZoning {
            zones: &zones,
            gauges: &gauges,
            locator: &loc,
            interp: &Linear,
            renormalise: false,
            unc: None,
        };
        let mut st = Scratch::default();
        let q = |x: f64, y: f64, t_s: f64| Query {
            x,
            y,
            t_s,
            line: "",
        };
        assert_eq!(
            m.tide_at(&q(0.9, 0.1, 300.0), &mut st),
            TideOutcome::Tide {
                zone: 0,
                tide_m: 1.5,
                u: None,
                filled: None,
            }
        );
        assert_eq!(
            m.tide_at(&q(0.1, 0.9, 300.0), &mut st),
            TideOutcome::Outside
        );
        assert!(matches!(
            m.tide_at(&q(0.9, 0.1, 900.0), &mut st),
            TideOutcome::NoData { zone: 0, .. }
        ));
    }
}
