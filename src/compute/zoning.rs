//! Discrete tidal zoning: tide at a place from one or more gauges through time correctors and
//! range ratios.
//!
//! Owns: [`Gauge`], [`GaugeFeed`], [`MeanLevelForm`], [`Zone`] and the zone tide formula.
//! For a zone `z` fed by gauges `i` with weights `w_i` (Σ w_i = 1), time correctors `Δt_i` and
//! range ratios `R_i`, with `h_i` the gauge level above chart datum and `M_i` its mean level:
//!
//! ```text
//! zone-mean form:  tide_z(t) = M_z + Σ w_i · R_i · ( h_i(t − Δt_i) − M_i )
//! scaled form:     tide_z(t) =       Σ w_i · R_i ·   h_i(t − Δt_i)          (M_z = Σ w_i R_i M_i)
//! ```
//!
//! A positive time corrector means the tide arrives later in the zone than at the gauge.
//!
//! # References
//! Discrete tidal zoning with time correctors and range ratios is common practice in hydrographic
//! surveying; the two mean-level forms are those of the project's field primer (§4.1).

use super::series::{LevelAt, LevelSeries, NoLevel, TimeInterpolation};

/// Largest time corrector accepted, minutes (|Δt|). A time corrector carries the tide across a
/// survey area; beyond a quarter of a semidiurnal period (about 3 h) the zone's tide is no longer
/// a shifted copy of the gauge's, and 6 h (half a period, so the sign of the tide is turned)
/// cannot be a zoning value but a mistake of units (hours, seconds) or sign. Common practice.
pub const TIME_CORRECTOR_REFUSED_ABOVE_MIN: f64 = 360.0;

/// Time correctors larger than this, minutes (|Δt|), are accepted with a warning: two hours is
/// already far beyond the correctors of a zoning around one gauge (minutes to tens of minutes).
/// Common practice.
pub const TIME_CORRECTOR_WARNED_ABOVE_MIN: f64 = 120.0;

/// Smallest and largest range ratio accepted. A zone's range a fifth or five times its gauge's
/// is already the edge of what a discrete zoning around a gauge can carry; outside it the ratio
/// is a mistake (a percentage, a range instead of a ratio). Common practice.
pub const RANGE_RATIO_BAND: (f64, f64) = (0.2, 5.0);

/// Largest zone mean level accepted, metres (|M_z| above chart datum). The greatest tidal
/// ranges on Earth are about 16 m, and chart datums lie near the lowest tides, so a mean level
/// more than 100 m from chart datum is a slip of units (centimetres, millimetres) or of sign.
/// Common practice.
pub const ZONE_MEAN_LEVEL_REFUSED_ABOVE_M: f64 = 100.0;

/// Smallest gauge weight accepted in a zone fed by several gauges. A weight of zero adds nothing
/// to the tide but still needs a level from the gauge at every time (a gap there would leave the
/// sounding without tide), so it is refused: remove the feed instead. Weights must be above this
/// and sum to 1.
pub const FEED_WEIGHT_MIN_EXCLUSIVE: f64 = 0.0;

/// A tide gauge as the computation needs it.
#[derive(Debug, Clone)]
pub struct Gauge {
    /// The gauge's identifier, as used by zones.
    pub id: String,
    /// The gauge's record, already converted to metres above chart datum, UTC times.
    pub series: LevelSeries,
    /// Mean water level at the gauge above chart datum `M_g`, metres.
    pub mean_level_above_datum_m: f64,
}

/// One gauge's contribution to a zone.
#[derive(Debug, Clone, PartialEq)]
pub struct GaugeFeed {
    /// Index of the gauge in the gauge list.
    pub gauge: usize,
    /// Weight `w_i` of this gauge in the zone (the weights of a zone sum to 1).
    pub weight: f64,
    /// Time corrector `Δt_i`, minutes; positive: the tide arrives later in the zone.
    pub time_corrector_min: f64,
    /// Range ratio `R_i` (zone range / gauge range), dimensionless.
    pub range_ratio: f64,
}

/// Which of the two zoning formulas a zone uses.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
pub enum MeanLevelForm {
    /// `tide = M_z + Σ w R (h − M_g)`, with the zone's own mean level above chart datum.
    ZoneMean {
        /// The zone's mean level above chart datum `M_z`, metres.
        zone_mean_level_above_datum_m: f64,
    },
    /// `tide = Σ w R h`: the zone's mean level is taken as `Σ w R M_g`.
    Scaled,
}

impl MeanLevelForm {
    /// Name used in reports and output.
    pub fn label(&self) -> &'static str {
        match self {
            MeanLevelForm::ZoneMean { .. } => "zone_mean",
            MeanLevelForm::Scaled => "scaled",
        }
    }
}

/// A tidal zone's correctors (its polygon lives in the locator).
#[derive(Debug, Clone)]
pub struct Zone {
    /// The zone's identifier.
    pub id: String,
    /// The gauges feeding the zone.
    pub feeds: Vec<GaugeFeed>,
    /// Mean-level form of the zoning formula.
    pub mean_level: MeanLevelForm,
}

/// The gauge state that entered one feed's tide: used by the uncertainty budget.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FeedState {
    /// Index of the gauge in the gauge list.
    pub gauge: usize,
    /// The (shifted) UTC time at which the gauge's level was taken, seconds.
    pub at_s: f64,
    /// Gauge level above chart datum at the shifted time `t − Δt`, metres (zero for a missing
    /// feed).
    pub level: LevelAt,
    /// The weight the feed entered the tide with: its own, or renormalised over the feeds that
    /// had a level (0 for a missing feed).
    pub weight: f64,
    /// The feed had no level and was left out of a renormalised blend
    /// ([`Zone::tide_at_renormalising`]).
    pub missing: bool,
}

/// Why a zone has no tide at an instant.
#[derive(Debug, Clone, PartialEq)]
pub struct NoZoneTide {
    /// Index of the gauge that had no level.
    pub gauge: usize,
    /// The shifted time at which it had none, UTC seconds.
    pub at_s: f64,
    /// Why.
    pub why: NoLevel,
}

impl Zone {
    /// Tide above chart datum in this zone at UTC time `t_s`, metres.
    ///
    /// `states` receives each feed's gauge state, in feed order (for the uncertainty budget);
    /// it is cleared first.
    ///
    /// # Units
    /// `t_s` seconds since the Unix epoch (UTC); result metres above chart datum, positive up.
    pub fn tide_at(
        &self,
        gauges: &[Gauge],
        interp: &dyn TimeInterpolation,
        t_s: f64,
        states: &mut Vec<FeedState>,
    ) -> Result<f64, NoZoneTide> {
        states.clear();
        let mut sum = 0.0;
        for feed in &self.feeds {
            let g = &gauges[feed.gauge];
            let shifted = t_s - feed.time_corrector_min * 60.0;
            let level = interp
                .level_at(&g.series, shifted)
                .map_err(|why| NoZoneTide {
                    gauge: feed.gauge,
                    at_s: shifted,
                    why,
                })?;
            states.push(FeedState {
                gauge: feed.gauge,
                at_s: shifted,
                level,
                weight: feed.weight,
                missing: false,
            });
            sum += match self.mean_level {
                MeanLevelForm::ZoneMean { .. } => {
                    feed.weight * feed.range_ratio * (level.height_m - g.mean_level_above_datum_m)
                }
                MeanLevelForm::Scaled => feed.weight * feed.range_ratio * level.height_m,
            };
        }
        Ok(match self.mean_level {
            MeanLevelForm::ZoneMean {
                zone_mean_level_above_datum_m,
            } => zone_mean_level_above_datum_m + sum,
            MeanLevelForm::Scaled => sum,
        })
    }

    /// As [`Zone::tide_at`], but when some feeds of a zone fed by several gauges have no level
    /// and at least one has, the tide is the blend of those with a level, their weights
    /// divided by the sum of theirs: `tide = M_z + Σ' (w_i / Σ' w) R_i (h_i − M_i)` (scaled
    /// form alike). The missing feeds' states have `missing` set; the first missing feed's
    /// reason is returned beside the tide.
    ///
    /// # Units
    /// As [`Zone::tide_at`].
    pub fn tide_at_renormalising(
        &self,
        gauges: &[Gauge],
        interp: &dyn TimeInterpolation,
        t_s: f64,
        states: &mut Vec<FeedState>,
    ) -> Result<(f64, Option<NoZoneTide>), NoZoneTide> {
        match self.tide_at(gauges, interp, t_s, states) {
            Ok(t) => return Ok((t, None)),
            Err(e) if self.feeds.len() < 2 => return Err(e),
            Err(_) => {}
        }
        states.clear();
        let mut first_missing = None;
        let mut present_w = 0.0;
        for feed in &self.feeds {
            let shifted = t_s - feed.time_corrector_min * 60.0;
            match interp.level_at(&gauges[feed.gauge].series, shifted) {
                Ok(level) => {
                    present_w += feed.weight;
                    states.push(FeedState {
                        gauge: feed.gauge,
                        at_s: shifted,
                        level,
                        weight: feed.weight,
                        missing: false,
                    });
                }
                Err(why) => {
                    first_missing.get_or_insert(NoZoneTide {
                        gauge: feed.gauge,
                        at_s: shifted,
                        why,
                    });
                    states.push(FeedState {
                        gauge: feed.gauge,
                        at_s: shifted,
                        level: LevelAt {
                            height_m: 0.0,
                            rate_m_per_s: 0.0,
                            bracket: 0,
                        },
                        weight: 0.0,
                        missing: true,
                    });
                }
            }
        }
        let missing = first_missing.expect("tide_at failed, so a feed has no level");
        if present_w <= 0.0 {
            return Err(missing);
        }
        let mut sum = 0.0;
        for (feed, st) in self.feeds.iter().zip(states.iter_mut()) {
            if st.missing {
                continue;
            }
            st.weight = feed.weight / present_w;
            let g = &gauges[feed.gauge];
            sum += st.weight
                * feed.range_ratio
                * match self.mean_level {
                    MeanLevelForm::ZoneMean { .. } => {
                        st.level.height_m - g.mean_level_above_datum_m
                    }
                    MeanLevelForm::Scaled => st.level.height_m,
                };
        }
        let tide = match self.mean_level {
            MeanLevelForm::ZoneMean {
                zone_mean_level_above_datum_m,
            } => zone_mean_level_above_datum_m + sum,
            MeanLevelForm::Scaled => sum,
        };
        Ok((tide, Some(missing)))
    }

    /// The largest, over the zone's feeds, of the RMS difference between the full blend and the
    /// blend of the other feeds with their weights renormalised, at the instants `times_s`
    /// where every feed has a level; `None` for a zone of one feed or when no instant has
    /// every level. This is the measured disagreement [`Zone::tide_at_renormalising`] risks.
    ///
    /// # Units
    /// Times UTC seconds; result metres.
    pub fn renormalisation_rms_m(
        &self,
        gauges: &[Gauge],
        interp: &dyn TimeInterpolation,
        times_s: &[f64],
    ) -> Option<f64> {
        let n = self.feeds.len();
        if n < 2 {
            return None;
        }
        let mut ss = vec![0.0; n];
        let mut count = 0usize;
        let mut states = Vec::new();
        let mut parts = vec![0.0; n];
        for &t in times_s {
            if self.tide_at(gauges, interp, t, &mut states).is_err() {
                continue;
            }
            for (k, (feed, st)) in self.feeds.iter().zip(&states).enumerate() {
                let g = &gauges[feed.gauge];
                parts[k] = feed.range_ratio
                    * match self.mean_level {
                        MeanLevelForm::ZoneMean { .. } => {
                            st.level.height_m - g.mean_level_above_datum_m
                        }
                        MeanLevelForm::Scaled => st.level.height_m,
                    };
            }
            let full: f64 = self
                .feeds
                .iter()
                .zip(&parts)
                .map(|(f, p)| f.weight * p)
                .sum();
            for (k, ss_k) in ss.iter_mut().enumerate() {
                let w_rest: f64 = self.weight_sum() - self.feeds[k].weight;
                if w_rest <= 0.0 {
                    continue;
                }
                let rest: f64 = self
                    .feeds
                    .iter()
                    .zip(&parts)
                    .enumerate()
                    .filter(|(j, _)| *j != k)
                    .map(|(_, (f, p))| f.weight / w_rest * p)
                    .sum();
                *ss_k += (full - rest).powi(2);
            }
            count += 1;
        }
        (count > 0).then(|| {
            ss.iter()
                .map(|s| (s / count as f64).sqrt())
                .fold(0.0, f64::max)
        })
    }

    /// Sum of the feeds' weights (1 for a well-formed zone).
    pub fn weight_sum(&self) -> f64 {
        self.feeds.iter().map(|f| f.weight).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::series::Linear;
    use approx::assert_relative_eq;

    fn gauge(id: &str, heights: &[f64], mean: f64) -> Gauge {
        Gauge {
            id: id.into(),
            series: LevelSeries {
                times_s: (0..heights.len()).map(|i| i as f64 * 600.0).collect(),
                heights_m: heights.to_vec(),
                max_gap_s: 1800.0,
                ..Default::default()
            },
            mean_level_above_datum_m: mean,
        }
    }

    /// Hand-worked example (numbers derived here, not taken from any program).
    ///
    /// Gauge A, 10-min samples: 00:00 2.00 m, 00:10 2.30 m, 00:20 2.50 m above CD, mean level
    /// M_A = 2.10 m. Zone with Δt = +5 min, R = 1.10, at t = 00:15:
    /// shifted time 00:10 → h = 2.30 m.
    /// * zone-mean form with M_z = 2.25 m: 2.25 + 1.10 × (2.30 − 2.10) = 2.25 + 0.22 = 2.47 m
    /// * scaled form: 1.10 × 2.30 = 2.53 m
    ///
    /// At t = 00:20 the shifted time is 00:15, halfway: h = 2.40 m;
    /// zone-mean 2.25 + 1.10 × 0.30 = 2.58 m.
    ///
    /// Two gauges: B at 00:10 reads 1.80 m, mean M_B = 1.50 m, Δt_B = +10 min, R_B = 0.90;
    /// zone fed 0.6·A + 0.4·B at t = 00:15 (A shifted to 00:10: 2.30; B shifted to 00:05: halfway
    /// between B's 00:00 1.60 and 00:10 1.80 → 1.70), M_z = 2.00:
    /// 2.00 + 0.6 × 1.10 × (2.30 − 2.10) + 0.4 × 0.90 × (1.70 − 1.50)
    /// = 2.00 + 0.132 + 0.072 = 2.204 m.
    #[test]
    fn hand_worked_zoning_example() {
        let gauges = vec![
            gauge("A", &[2.00, 2.30, 2.50], 2.10),
            gauge("B", &[1.60, 1.80, 1.90], 1.50),
        ];
        let mut states = Vec::new();
        let feed_a = GaugeFeed {
            gauge: 0,
            weight: 1.0,
            time_corrector_min: 5.0,
            range_ratio: 1.10,
        };
        let zone_mean = Zone {
            id: "Z".into(),
            feeds: vec![feed_a.clone()],
            mean_level: MeanLevelForm::ZoneMean {
                zone_mean_level_above_datum_m: 2.25,
            },
        };
        let t = 15.0 * 60.0;
        assert_relative_eq!(
            zone_mean.tide_at(&gauges, &Linear, t, &mut states).unwrap(),
            2.47,
            epsilon = 1e-12
        );
        let scaled = Zone {
            mean_level: MeanLevelForm::Scaled,
            ..zone_mean.clone()
        };
        assert_relative_eq!(
            scaled.tide_at(&gauges, &Linear, t, &mut states).unwrap(),
            2.53,
            epsilon = 1e-12
        );
        assert_relative_eq!(
            zone_mean
                .tide_at(&gauges, &Linear, 20.0 * 60.0, &mut states)
                .unwrap(),
            2.58,
            epsilon = 1e-12
        );
        let blended = Zone {
            id: "AB".into(),
            feeds: vec![
                GaugeFeed {
                    weight: 0.6,
                    ..feed_a
                },
                GaugeFeed {
                    gauge: 1,
                    weight: 0.4,
                    time_corrector_min: 10.0,
                    range_ratio: 0.90,
                },
            ],
            mean_level: MeanLevelForm::ZoneMean {
                zone_mean_level_above_datum_m: 2.00,
            },
        };
        assert_relative_eq!(
            blended.tide_at(&gauges, &Linear, t, &mut states).unwrap(),
            2.204,
            epsilon = 1e-12
        );
        assert_eq!(states.len(), 2);
        assert_relative_eq!(states[1].level.height_m, 1.70, epsilon = 1e-12);
    }

    #[test]
    fn unit_corrector_gives_the_gauges_own_level() {
        let gauges = vec![gauge("A", &[2.0, 2.3, 2.5], 2.1)];
        let z = Zone {
            id: "Z".into(),
            feeds: vec![GaugeFeed {
                gauge: 0,
                weight: 1.0,
                time_corrector_min: 0.0,
                range_ratio: 1.0,
            }],
            mean_level: MeanLevelForm::Scaled,
        };
        let mut st = Vec::new();
        for t in [0.0, 300.0, 600.0, 900.0, 1200.0] {
            let want = Linear.level_at(&gauges[0].series, t).unwrap().height_m;
            assert_relative_eq!(z.tide_at(&gauges, &Linear, t, &mut st).unwrap(), want);
        }
    }

    #[test]
    fn missing_gauge_data_names_the_gauge_and_the_shifted_time() {
        let gauges = vec![gauge("A", &[2.0, 2.3, 2.5], 2.1)];
        let z = Zone {
            id: "Z".into(),
            feeds: vec![GaugeFeed {
                gauge: 0,
                weight: 1.0,
                time_corrector_min: 30.0,
                range_ratio: 1.0,
            }],
            mean_level: MeanLevelForm::Scaled,
        };
        let err = z
            .tide_at(&gauges, &Linear, 600.0, &mut Vec::new())
            .unwrap_err();
        assert_eq!(err.gauge, 0);
        assert_eq!(err.at_s, -1200.0);
        assert!(matches!(err.why, NoLevel::BeforeRecord { .. }));
    }
}

#[cfg(test)]
mod properties {
    use super::*;
    use crate::compute::reduce::reduce_depth;
    use crate::compute::series::Linear;
    use proptest::prelude::*;

    proptest! {
        /// A zone with Δt = 0 and R = 1 (either form, with M_z = M_g) gives the gauge's own level.
        #[test]
        fn unit_correctors_give_the_gauge_level(
            heights in prop::collection::vec(-2.0f64..9.0, 2..40),
            mean in 0.0f64..5.0,
            frac in 0.0f64..1.0,
            zone_mean_form in any::<bool>(),
        ) {
            let n = heights.len();
            let g = vec![Gauge {
                id: "g".into(),
                series: LevelSeries {
                    times_s: (0..n).map(|i| i as f64 * 360.0).collect(),
                    heights_m: heights,
                    max_gap_s: 1800.0,
                    ..Default::default()
                },
                mean_level_above_datum_m: mean,
            }];
            let z = Zone {
                id: "z".into(),
                feeds: vec![GaugeFeed { gauge: 0, weight: 1.0, time_corrector_min: 0.0, range_ratio: 1.0 }],
                mean_level: if zone_mean_form {
                    MeanLevelForm::ZoneMean { zone_mean_level_above_datum_m: mean }
                } else {
                    MeanLevelForm::Scaled
                },
            };
            let t = frac * (n - 1) as f64 * 360.0;
            let want = Linear.level_at(&g[0].series, t).unwrap().height_m;
            let got = z.tide_at(&g, &Linear, t, &mut Vec::new()).unwrap();
            prop_assert!((got - want).abs() < 1e-9, "{} vs {}", got, want);
        }

        /// Adding the tide back to a reduced depth gives the observed depth.
        #[test]
        fn tide_added_back_gives_the_observed_depth(depth in -5.0f64..500.0, tide in -3.0f64..12.0) {
            prop_assert!((reduce_depth(depth, tide) + tide - depth).abs() <= 1e-12 * (1.0 + depth.abs()));
        }
    }

    /// Renormalisation, hand-worked: the two-gauge zone of `hand_worked_zoning_example`
    /// (0.6·A + 0.4·B, M_z = 2.00) at 00:15 with B having no level (a gap): the tide is A's
    /// alone with weight 0.6/0.6 = 1: 2.00 + 1.10 × (2.30 − 2.10) = 2.22 m. With both levels it
    /// equals `tide_at` (2.204 m, the same example).
    #[test]
    fn renormalised_blend_of_the_feeds_with_a_level() {
        use crate::compute::series::{LevelSeries, Linear};
        use approx::assert_relative_eq;
        let gauge = |id: &str, heights: &[f64], mean: f64| Gauge {
            id: id.into(),
            series: LevelSeries {
                times_s: (0..heights.len()).map(|i| i as f64 * 600.0).collect(),
                heights_m: heights.to_vec(),
                max_gap_s: 1800.0,
                ..Default::default()
            },
            mean_level_above_datum_m: mean,
        };
        let mut b = gauge("B", &[1.60, 1.80, 1.90], 1.50);
        b.series.times_s = vec![0.0, 60.0, 1200.0];
        b.series.max_gap_s = 600.0;
        let gauges = vec![gauge("A", &[2.00, 2.30, 2.50], 2.10), b];
        let zone = Zone {
            id: "Z".into(),
            feeds: vec![
                GaugeFeed {
                    gauge: 0,
                    weight: 0.6,
                    time_corrector_min: 5.0,
                    range_ratio: 1.10,
                },
                GaugeFeed {
                    gauge: 1,
                    weight: 0.4,
                    time_corrector_min: 10.0,
                    range_ratio: 0.90,
                },
            ],
            mean_level: MeanLevelForm::ZoneMean {
                zone_mean_level_above_datum_m: 2.00,
            },
        };
        let mut states = Vec::new();
        assert!(zone.tide_at(&gauges, &Linear, 900.0, &mut states).is_err());
        let (tide, missing) = zone
            .tide_at_renormalising(&gauges, &Linear, 900.0, &mut states)
            .unwrap();
        assert_relative_eq!(tide, 2.22, epsilon = 1e-12);
        assert_eq!(missing.map(|m| m.gauge), Some(1));
        assert!(states[1].missing && !states[0].missing);
        assert_relative_eq!(states[0].weight, 1.0, epsilon = 1e-12);
        let full = vec![
            gauge("A", &[2.00, 2.30, 2.50], 2.10),
            gauge("B", &[1.60, 1.80, 1.90], 1.50),
        ];
        let (tide, missing) = zone
            .tide_at_renormalising(&full, &Linear, 900.0, &mut states)
            .unwrap();
        assert_relative_eq!(tide, 2.204, epsilon = 1e-12);
        assert!(missing.is_none());
    }
}
