//! The QA report of a reduction: what the reviewer reads (HTML) and what machines read (JSON,
//! schema in `docs/qa-report.schema.json`). Built from the run's QA counts, the zones' tide and
//! its 95 % band over the survey period, and a thinned sample of soundings for the map.

use serde::Serialize;

use super::load::Loaded;
use super::reduce::RunSummary;
use crate::compute::qa::{summarise_group, GroupSummary, RATIO_BINS, RATIO_BIN_WIDTH};
use crate::compute::uncertainty::{tide_budget, SurveyOrder, K95};
use crate::io::crs::Transformer;
use crate::io::timefmt::utc_label;

/// Identifier of the report layout; changes only when a field changes meaning or goes away.
pub const QA_SCHEMA: &str = "ebbwise-qa-report/1";

/// Step of the tide series in the report, minutes.
pub const TIDE_SERIES_STEP_MIN: f64 = 5.0;

/// A zone or line that does not meet the chosen order.
#[derive(Debug, Clone, Serialize)]
pub struct Failing {
    /// Zone or line id.
    pub id: String,
    /// Soundings assessed.
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
    /// Tide above chart datum, metres (null where there is no gauge data).
    pub tide_m: Vec<Option<f64>>,
    /// Expanded (95 %, k = 1.96) uncertainty of the tide, metres.
    pub u95_tide_m: Vec<Option<f64>>,
    /// Times as UTC seconds (for plotting; not in the JSON).
    #[serde(skip)]
    pub times_s: Vec<f64>,
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
}

/// Inputs of the budget as used.
#[derive(Debug, Clone, Serialize)]
pub struct UncertaintyInputs {
    /// Per gauge (standard uncertainties).
    pub gauges: Vec<GaugeInput>,
    /// Per zone (standard uncertainties).
    pub zones: Vec<ZoneInput>,
    /// Sounding model a (m) and b, standard; used where a file has no u_depth column.
    pub sounding_a_m: f64,
    /// See `sounding_a_m`.
    pub sounding_b: f64,
    /// Inputs that fell back to the project's (demo) defaults.
    pub defaulted: Vec<String>,
}

/// Histogram of U95 TVU / allowed TVU for the chosen order.
#[derive(Debug, Clone, Serialize)]
pub struct RatioHistogram {
    /// Bin width (ratio units); bin k covers [k·w, (k+1)·w); the last bin also holds all above.
    pub bin_width: f64,
    /// Soundings per bin.
    pub counts: Vec<u64>,
}

/// A reduced sounding on the map.
#[derive(Debug, Clone, Copy)]
pub struct MapPoint {
    /// Longitude, degrees.
    pub lon: f64,
    /// Latitude, degrees.
    pub lat: f64,
    /// U95/allowed for the chosen order.
    pub ratio: f64,
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
    /// The order each sounding is judged against.
    pub chosen_order: SurveyOrder,
    /// Share of soundings that must be within an order's limit to meet it.
    pub acceptance_share: f64,
    /// Every order assessed (S-44 Edition 6.1.0 Table 1, then custom orders).
    pub orders: Vec<SurveyOrder>,
    /// Soundings per status over the run.
    pub rows_by_status: crate::compute::reduce::StatusCounts,
    /// The strictest built-in order the whole survey meets, if any.
    pub achieved_order: Option<String>,
    /// The component with the largest mean share of u_tvu² over the survey.
    pub dominant_component: String,
    /// The whole survey.
    pub survey: GroupSummary,
    /// Per zone.
    pub zones: Vec<GroupSummary>,
    /// Per survey line.
    pub lines: Vec<GroupSummary>,
    /// Zones that do not meet the chosen order.
    pub failing_zones: Vec<Failing>,
    /// Lines that do not meet the chosen order.
    pub failing_lines: Vec<Failing>,
    /// U95/allowed over the survey, chosen order.
    pub ratio_histogram: RatioHistogram,
    /// Tide and 95 % band per zone.
    pub tide_series: Vec<ZoneTideSeries>,
    /// The uncertainty inputs used.
    pub inputs: UncertaintyInputs,
    /// Map points (HTML only).
    #[serde(skip)]
    pub map_points: Vec<MapPoint>,
    /// Zone polygons, lon/lat (HTML only).
    #[serde(skip)]
    pub zone_polygons: Vec<(String, geo::MultiPolygon<f64>)>,
}

fn failing(g: &GroupSummary) -> Option<Failing> {
    (!g.meets_chosen && g.soundings > 0).then(|| Failing {
        id: g.id.clone(),
        soundings: g.soundings,
        share_within: g.share_within_chosen,
        shortfall: g.shortfall.unwrap_or(0.0),
        p95_ratio: g.p95_ratio_chosen,
    })
}

/// Builds the QA report; `None` when the run computed no uncertainty.
pub fn build_qa_report(loaded: &Loaded, run: &RunSummary) -> Option<QaReport> {
    let u = loaded.uncertainty.as_ref()?;
    let mut qa = run.qa.clone()?;
    qa.settle();
    let qa = &qa;
    let acc = u.acceptance_share;
    let sum = |id: &str, g, b| summarise_group(id, g, b, &u.orders, u.n_builtin, u.chosen, acc);
    let survey = sum("survey", &qa.overall, Some(&qa.overall_budget));
    let zones: Vec<GroupSummary> = loaded
        .zones
        .iter()
        .zip(&qa.zones)
        .map(|(z, (g, b))| sum(&z.id, g, Some(b)))
        .collect();
    let lines: Vec<GroupSummary> = qa.lines.iter().map(|(id, g)| sum(id, g, None)).collect();
    let tide_series = match run.time_range_s {
        Some((t0, t1)) => tide_series(loaded, t0, t1),
        None => Vec::new(),
    };
    let mut map_points = Vec::with_capacity(qa.samples.len());
    let groups = &loaded.project.spec.soundings;
    let transformers: Vec<Option<Transformer>> = groups
        .iter()
        .map(|g| Transformer::new(&g.crs, "EPSG:4326").ok())
        .collect();
    for s in &qa.samples {
        if let Some(Some(t)) = transformers.get(s.group) {
            if let Ok((lon, lat)) = t.convert(s.x, s.y) {
                map_points.push(MapPoint {
                    lon,
                    lat,
                    ratio: s.ratio,
                });
            }
        }
    }
    Some(QaReport {
        schema: QA_SCHEMA,
        ebbwise_version: env!("CARGO_PKG_VERSION"),
        project_name: loaded.project.spec.name.clone(),
        project_file: loaded.project.path.display().to_string(),
        caution: crate::CAUTION,
        chosen_order: u.orders[u.chosen].clone(),
        acceptance_share: acc,
        orders: u.orders.clone(),
        rows_by_status: run.rows_by_status,
        achieved_order: survey.strictest_order_met.clone(),
        dominant_component: survey
            .budget
            .as_ref()
            .map(|b| b.dominant_component.to_string())
            .unwrap_or_default(),
        failing_zones: zones.iter().filter_map(failing).collect(),
        failing_lines: lines.iter().filter_map(failing).collect(),
        ratio_histogram: RatioHistogram {
            bin_width: RATIO_BIN_WIDTH,
            counts: qa.overall.ratio_hist[..RATIO_BINS].to_vec(),
        },
        survey,
        zones,
        lines,
        tide_series,
        inputs: UncertaintyInputs {
            gauges: loaded
                .gauges
                .iter()
                .zip(&u.gauge_u)
                .map(|(g, x)| GaugeInput {
                    gauge: g.id.clone(),
                    u_gauge_m: x.u_gauge_m,
                    u_datum_m: x.u_datum_m,
                })
                .collect(),
            zones: loaded
                .zones
                .iter()
                .zip(&u.zone_u)
                .map(|(z, x)| ZoneInput {
                    zone: z.id.clone(),
                    u_time_corrector_min: x.u_time_corrector_min,
                    u_range_ratio: x.u_range_ratio,
                    u_zone_m: x.u_zone_m,
                })
                .collect(),
            sounding_a_m: u.sounding_model.a_m,
            sounding_b: u.sounding_model.b,
            defaulted: u.defaulted.clone(),
        },
        map_points,
        zone_polygons: loaded
            .zoning
            .zones
            .iter()
            .map(|z| (z.id.clone(), z.polygon_lonlat.clone()))
            .collect(),
    })
}

/// Tide and U95 of the tide per zone on a regular grid over `[t0, t1]`.
pub fn tide_series(loaded: &Loaded, t0: f64, t1: f64) -> Vec<ZoneTideSeries> {
    let Some(u) = loaded.uncertainty.as_ref() else {
        return Vec::new();
    };
    let step = TIDE_SERIES_STEP_MIN * 60.0;
    let start = (t0 / step).floor() * step;
    let n = (((t1 - start) / step).ceil() as usize + 1).min(20_000);
    let mut states = Vec::new();
    loaded
        .zones
        .iter()
        .enumerate()
        .map(|(zi, z)| {
            let mut s = ZoneTideSeries {
                zone: z.id.clone(),
                times_utc: Vec::with_capacity(n),
                tide_m: Vec::with_capacity(n),
                u95_tide_m: Vec::with_capacity(n),
                times_s: Vec::with_capacity(n),
            };
            for k in 0..n {
                let t = start + k as f64 * step;
                s.times_s.push(t);
                s.times_utc.push(utc_label(t));
                match z.tide_at(&loaded.gauges, loaded.interp.as_ref(), t, &mut states) {
                    Ok(tide) => {
                        let b = tide_budget(
                            z,
                            &loaded.gauges,
                            &u.gauge_u,
                            &u.zone_u[zi],
                            &u.gauge_rates,
                            t,
                            &states,
                        );
                        s.tide_m.push(Some((tide * 1e4).round() / 1e4));
                        s.u95_tide_m
                            .push(Some((K95 * b.u_tide_m() * 1e4).round() / 1e4));
                    }
                    Err(_) => {
                        s.tide_m.push(None);
                        s.u95_tide_m.push(None);
                    }
                }
            }
            s
        })
        .collect()
}
