//! The QA report of a reduction as plain data: what `run::qa_report` builds from the run's QA
//! counts and `io::report_html` renders, and what `qa-report.json` serialises (schema
//! `docs/qa-report.schema.json`).
//!
//! Every number here is already rounded to the decimals stated in `docs/outputs.md` (shares and
//! ratios in [`super::qa`], metres to [`METRE_DECIMALS`](super::qa::METRE_DECIMALS)); inputs are as the project gives them.

use serde::Serialize;

use super::qa::GroupSummary;
use super::reduce::StatusCounts;

use super::uncertainty::SurveyOrder;

/// Identifier of the report layout; changes only when a field changes meaning or goes away.
pub const QA_SCHEMA: &str = "ebbwise-qa-report/3";

/// A zone or line that does not meet the chosen order.
#[derive(Debug, Clone, Serialize)]
pub struct Failing {
    /// Zone or line id.
    pub id: String,
    /// Every sounding of the group, whatever its status.
    pub all_soundings: u64,
    /// Soundings judged (reduced, with an uncertainty).
    pub soundings: u64,
    /// Share within the chosen order (0–1).
    pub share_within: f64,
    /// Acceptance share minus the share within (0–1).
    pub shortfall: f64,
    /// 95th percentile of U95/allowed (above 1: by how much the limit is exceeded).
    pub p95_ratio: f64,
}

/// Tide and its 95 % band in one zone over the survey period.
#[derive(Debug, Clone, Serialize)]
pub struct ZoneTideSeries {
    /// Zone id.
    pub zone: String,
    /// Times, ISO 8601 UTC.
    pub times_utc: Vec<String>,
    /// Tide above chart datum, metres to [`METRE_DECIMALS`](super::qa::METRE_DECIMALS) (null where there is no gauge
    /// data).
    pub tide_m: Vec<Option<f64>>,
    /// Expanded (95 %, k = 1.96) uncertainty of the tide, metres to [`METRE_DECIMALS`](super::qa::METRE_DECIMALS).
    pub u95_tide_m: Vec<Option<f64>>,
    /// Times as UTC seconds (for plotting; not in the JSON).
    #[serde(skip)]
    pub times_s: Vec<f64>,
    /// The gauges whose samples the zone's plot overlays (those feeding it, or blended).
    #[serde(skip)]
    pub gauges: Vec<String>,
    /// The stretches with no tide, to the second: (from, to UTC seconds, whether for a sample
    /// quality control set aside rather than a gap in a record); HTML only.
    #[serde(skip)]
    pub gaps: Vec<(f64, f64, bool)>,
}

/// The stretches of a series on `times_s` with no tide (`has_tide[k]` false), each edge found to
/// `tol_s` by bisection with `probe`, which says at an instant whether there is a tide (`None`)
/// or not, and if not whether it is for a sample quality control set aside (`Some(true)`).
pub fn refine_gaps(
    times_s: &[f64],
    has_tide: &[bool],
    tol_s: f64,
    mut probe: impl FnMut(f64) -> Option<bool>,
) -> Vec<(f64, f64, bool)> {
    let mut out = Vec::new();
    let n = times_s.len().min(has_tide.len());
    let mut k = 0;
    // The instant between a (tide) and b (none), or the other way round, where it changes.
    let edge = |mut with: f64, mut without: f64, probe: &mut dyn FnMut(f64) -> Option<bool>| {
        while (with - without).abs() > tol_s {
            let mid = 0.5 * (with + without);
            if probe(mid).is_none() {
                with = mid;
            } else {
                without = mid;
            }
        }
        0.5 * (with + without)
    };
    while k < n {
        if has_tide[k] {
            k += 1;
            continue;
        }
        let i0 = k;
        while k < n && !has_tide[k] {
            k += 1;
        }
        let flagged = probe(times_s[i0]).unwrap_or(false);
        let from = if i0 > 0 {
            edge(times_s[i0 - 1], times_s[i0], &mut probe)
        } else {
            times_s[i0]
        };
        let to = if k < n {
            edge(times_s[k], times_s[k - 1], &mut probe)
        } else {
            times_s[k - 1]
        };
        out.push((from, to, flagged));
    }
    out
}

impl ZoneTideSeries {
    /// An empty series of zone `zone` with room for `n` instants.
    pub fn with_capacity(zone: &str, n: usize) -> ZoneTideSeries {
        ZoneTideSeries {
            zone: zone.to_string(),
            times_utc: Vec::with_capacity(n),
            tide_m: Vec::with_capacity(n),
            u95_tide_m: Vec::with_capacity(n),
            times_s: Vec::with_capacity(n),
            gauges: Vec::new(),
            gaps: Vec::new(),
        }
    }
}

/// A survey line (the unit a crew re-runs): its QA counts and where and when it ran.
#[derive(Debug, Clone, Serialize)]
pub struct LineSummary {
    /// The line's counts, shares and budget (`id` is the line's id, or the soundings file's
    /// name when the file has no line column).
    #[serde(flatten)]
    pub group: GroupSummary,
    /// The soundings files (launch files) its soundings come from.
    pub files: Vec<String>,
    /// Its first readable sounding's time, ISO 8601 UTC.
    pub first_utc: Option<String>,
    /// Its last readable sounding's time, ISO 8601 UTC.
    pub last_utc: Option<String>,
    /// The zones its soundings lie in.
    pub zones_crossed: Vec<String>,
}

/// One input file of the run and its SHA-256.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct InputFile {
    /// What the file is (`project`, `zoning`, `gauge record 'A'`, `soundings`, …).
    pub role: String,
    /// Path as used.
    pub path: String,
    /// SHA-256 of its content, hex.
    pub sha256: String,
}

/// Where the report's numbers came from.
#[derive(Debug, Clone, Serialize)]
pub struct ReportProvenance {
    /// ebbwise version.
    pub ebbwise_version: &'static str,
    /// When the report was made, ISO 8601 UTC.
    pub created_utc: String,
    /// Project file.
    pub project_file: String,
    /// Every input file with its SHA-256.
    pub inputs: Vec<InputFile>,
}

/// A gauge's samples over the survey period, for the tide plots (HTML only).
#[derive(Debug, Clone, Default)]
pub struct GaugeTrace {
    /// Gauge id.
    pub gauge: String,
    /// Samples used (time UTC seconds, level above chart datum m), gap-filled ones included.
    pub used: Vec<(f64, f64)>,
    /// Of those, the samples gap filling added.
    pub filled: Vec<(f64, f64)>,
    /// Samples quality control set aside, with their reading where it is a number.
    pub flagged: Vec<(f64, f64)>,
}

/// The difference of one pair of gauges compared through the zoning's correctors, over the
/// survey period.
#[derive(Debug, Clone, Serialize)]
pub struct PairDifference {
    /// Pair name (as `gauge-differences.csv` of `ebbwise qc` names it).
    pub pair: String,
    /// What `a` is.
    pub a: String,
    /// What `b` is.
    pub b: String,
    /// Differences within the survey period.
    pub n: usize,
    /// Mean of `a − b`, metres.
    pub mean_m: f64,
    /// Largest |a − b|, metres.
    pub max_abs_m: f64,
    /// Whether `ebbwise qc` would flag the pair (over the whole records).
    pub flagged: bool,
    /// Why.
    pub findings: Vec<String>,
    /// The differences (time UTC seconds, metres), for the plot (HTML only).
    #[serde(skip)]
    pub series: Vec<(f64, f64)>,
}

/// A gauge's uncertainty inputs as used.
#[derive(Debug, Clone, Serialize)]
pub struct GaugeInput {
    /// Gauge id.
    pub gauge: String,
    /// Sensor + interpolation standard uncertainty, metres.
    pub u_gauge_m: f64,
    /// Chart-datum standard uncertainty, metres.
    pub u_datum_m: f64,
}

/// A zone's uncertainty inputs as used.
#[derive(Debug, Clone, Serialize)]
pub struct ZoneInput {
    /// Zone id.
    pub zone: String,
    /// Time corrector standard uncertainty, minutes.
    pub u_time_corrector_min: f64,
    /// Range ratio standard uncertainty.
    pub u_range_ratio: f64,
    /// Spatial standard uncertainty, metres.
    pub u_zone_m: f64,
    /// Standard uncertainty of chart datum at the zone as the budget uses it, metres: the
    /// zone's own, or carried from its gauges (`√Σ (w_i u_datum,i)²`, or `√Σ (w_i R_i u_datum,i)²`
    /// in the scaled form).
    pub u_datum_m: f64,
    /// Where `u_datum_m` comes from: `zone` (the zone's own `u_datum_m`), `gauges` (zone-mean
    /// form, carried from the gauges with coefficient `w_i`), `gauges_scaled` (scaled form,
    /// coefficient `w_i R_i`).
    pub datum_from: &'static str,
}

/// Inputs of the budget as used.
#[derive(Debug, Clone, Serialize)]
pub struct UncertaintyInputs {
    /// Per gauge (standard uncertainties).
    pub gauges: Vec<GaugeInput>,
    /// Per zone (standard uncertainties); empty when the tide is continuous (the zones'
    /// correctors are not used).
    pub zones: Vec<ZoneInput>,
    /// The continuous tide's own inputs (`[tide_field]`); `None` with the zoning.
    pub tide_field: Option<TideFieldInput>,
    /// Sounding model a (m) and b, standard; used where a file has no u_depth column.
    pub sounding_a_m: f64,
    /// See `sounding_a_m`.
    pub sounding_b: f64,
    /// Inputs that fell back to the project's (demo) defaults.
    pub defaulted: Vec<String>,
}

/// The inputs of a continuous tide (`[tide_field]`), as used.
#[derive(Debug, Clone, Serialize)]
pub struct TideFieldInput {
    /// `corrector_field` or `astronomical_residual`.
    pub mode: &'static str,
    /// The dominant constituent the correctors are taken from (M2 or K1, by the form factor of
    /// the stations' mean constants).
    pub dominant: &'static str,
    /// The field's departure from linear at `field_scale_km`, metres (standard).
    pub u_field_m: f64,
    /// The distance `u_field_m` refers to, kilometres.
    pub field_scale_km: f64,
    /// A station's relative amplitude error (standard).
    pub u_station_range_ratio: f64,
    /// A station's phase error, minutes (standard).
    pub u_station_time_min: f64,
    /// The field's stations: gauges with constants, then virtual gauges.
    pub stations: Vec<String>,
    /// The gauges whose records are blended.
    pub blended_gauges: Vec<String>,
}

/// Histogram of U95 TVU / allowed TVU for the chosen order.
#[derive(Debug, Clone, Serialize)]
pub struct RatioHistogram {
    /// Bin width (ratio units); bin k covers [k·w, (k+1)·w); the last bin also holds all above.
    pub bin_width: f64,
    /// Soundings per bin.
    pub counts: Vec<u64>,
}

/// What a map point shows.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum MapMark {
    /// A judged sounding (the worst of its cell), by its U95/allowed for the chosen order.
    Judged(f64),
    /// A drying height (a reduced depth below zero).
    Drying,
    /// A sounding not reduced, by its status word.
    Unreduced(&'static str),
}

/// A sounding on the map.
#[derive(Debug, Clone, Copy)]
pub struct MapPoint {
    /// Longitude, degrees.
    pub lon: f64,
    /// Latitude, degrees.
    pub lat: f64,
    /// What it shows.
    pub mark: MapMark,
}

/// A gauge on the map.
#[derive(Debug, Clone)]
pub struct MapGauge {
    /// Gauge id.
    pub id: String,
    /// Longitude, degrees.
    pub lon: f64,
    /// Latitude, degrees.
    pub lat: f64,
    /// A virtual gauge (constants only, no record).
    pub virtual_gauge: bool,
}

/// The QA report.
#[derive(Debug, Clone, Serialize)]
pub struct QaReport {
    /// Layout identifier, [`QA_SCHEMA`].
    pub schema: &'static str,
    /// ebbwise version.
    pub ebbwise_version: &'static str,
    /// Project name.
    pub project_name: String,
    /// Project file.
    pub project_file: String,
    /// The caution that goes with every result.
    pub caution: &'static str,
    /// The tide model the soundings were reduced with: `zoning`, `corrector_field`,
    /// `astronomical_residual` or `correction_file`.
    pub tide_model: &'static str,
    /// The order each sounding is judged against.
    pub chosen_order: SurveyOrder,
    /// Share of soundings that must be within an order's limit to meet it.
    pub acceptance_share: f64,
    /// Every order assessed (S-44 Edition 6.1.0 Table 1, then custom orders).
    pub orders: Vec<SurveyOrder>,
    /// Soundings per status over the run.
    pub rows_by_status: StatusCounts,
    /// The strictest built-in order the whole survey meets, if any.
    pub achieved_order: Option<String>,
    /// The component with the largest mean share of u_tvu² over the survey.
    pub dominant_component: String,
    /// The whole survey.
    pub survey: GroupSummary,
    /// Per zone.
    pub zones: Vec<GroupSummary>,
    /// Per survey line.
    pub lines: Vec<LineSummary>,
    /// The soundings in no zone (outside the zoning, or unreadable), by status.
    pub no_zone: StatusCounts,
    /// Zones that do not meet the chosen order.
    pub failing_zones: Vec<Failing>,
    /// Lines that do not meet the chosen order.
    pub failing_lines: Vec<Failing>,
    /// U95/allowed over the survey, chosen order.
    pub ratio_histogram: RatioHistogram,
    /// Tide and 95 % band per zone.
    pub tide_series: Vec<ZoneTideSeries>,
    /// The tide step across each edge two zones share, over the survey period, largest first
    /// (module `compute::boundary`).
    pub boundary_steps: Vec<super::boundary::BoundaryStep>,
    /// The uncertainty inputs used.
    pub inputs: UncertaintyInputs,
    /// Whether gauge quality control ran in this reduction (`[qc] enabled`).
    pub qc_ran: bool,
    /// Per gauge, project order: how many samples quality control set aside.
    pub qc_gauges: Vec<GaugeQc>,
    /// Where the numbers came from.
    pub provenance: ReportProvenance,
    /// The gauge pairs compared through the zoning's correctors, over the survey period.
    pub gauge_differences: Vec<PairDifference>,
    /// The exports of this run: failing and unreduced soundings as GeoJSON (file names in the
    /// output folder).
    pub exports: Vec<String>,
    /// Map points: per map cell the worst judged sounding, a drying height and an unreduced
    /// sounding, where the cell has one (HTML only).
    #[serde(skip)]
    pub map_points: Vec<MapPoint>,
    /// Map cells over the longer side of the zoning (HTML only, for the thinning note).
    #[serde(skip)]
    pub map_cells_across: f64,
    /// Gauges and virtual gauges on the map (HTML only).
    #[serde(skip)]
    pub map_gauges: Vec<MapGauge>,
    /// Each gauge's samples over the survey period (HTML only).
    #[serde(skip)]
    pub gauge_traces: Vec<GaugeTrace>,
    /// Zone polygons, lon/lat (HTML only).
    #[serde(skip)]
    pub zone_polygons: Vec<(String, geo::MultiPolygon<f64>)>,
}

impl QaReport {
    /// Soundings within the chosen order's TVU limit, and every sounding of the run (all
    /// statuses): the headline's "of those judged" and "of all soundings".
    pub fn within_chosen_of_all(&self) -> (u64, u64) {
        let within = self
            .survey
            .orders
            .iter()
            .find(|o| o.order == self.chosen_order.name)
            .map_or(0, |o| o.soundings_within);
        (within, self.rows_by_status.total())
    }

    /// `within_chosen_of_all` as a share of every sounding (0–1; 0 for a run of none), rounded
    /// down to 0.001 like every share of the report: the survey's `share_within_of_all`.
    pub fn share_within_of_all(&self) -> f64 {
        self.survey.share_within_of_all
    }
}

/// What quality control did to one gauge's record in the reduction.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct GaugeQc {
    /// Gauge id.
    pub gauge: String,
    /// Samples in the record (rows with a time and a reading).
    pub samples: usize,
    /// Samples quality control set aside (not used, and none flagged for its level is
    /// interpolated across); `None` when QC did not run, and every sample was used unchecked.
    pub set_aside: Option<usize>,
}

/// The entry of `failing_zones` or `failing_lines` for a group that has soundings (judged or
/// not: a line with no gauge data fails, with nothing judged) and does not meet the chosen
/// order.
pub fn failing(g: &GroupSummary) -> Option<Failing> {
    (!g.meets_chosen && g.all_soundings > 0).then(|| Failing {
        id: g.id.clone(),
        all_soundings: g.all_soundings,
        soundings: g.soundings,
        share_within: g.share_within_chosen,
        shortfall: g.shortfall.unwrap_or(0.0),
        p95_ratio: g.p95_ratio_chosen,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gaps_are_found_to_the_second_with_their_cause() {
        // A tide everywhere but in [1000.5, 2203.25) (flagged) and from 5000 on (a gap).
        let times: Vec<f64> = (0..=12).map(|k| k as f64 * 500.0).collect();
        let probe = |t: f64| {
            if (1000.5..2203.25).contains(&t) {
                Some(true)
            } else if t >= 5000.0 {
                Some(false)
            } else {
                None
            }
        };
        let has: Vec<bool> = times.iter().map(|t| probe(*t).is_none()).collect();
        let g = refine_gaps(&times, &has, 1.0, probe);
        assert_eq!(g.len(), 2);
        assert!(
            (g[0].0 - 1000.5).abs() <= 1.0 && (g[0].1 - 2203.25).abs() <= 1.0,
            "{g:?}"
        );
        assert!(g[0].2);
        // Open to the end of the series: it runs to the last instant.
        assert!(
            (g[1].0 - 5000.0).abs() <= 1.0 && g[1].1 == 6000.0 && !g[1].2,
            "{g:?}"
        );
        // No gap, nothing.
        assert!(refine_gaps(&times, &vec![true; times.len()], 1.0, |_| None).is_empty());
    }
}
