//! Builds the QA report of a reduction ([`QaReport`], plain data in `compute::qa_report`) from
//! the run's QA counts, the zones' tide and its 95 % band over the survey period, the gauges'
//! samples and differences over it, the inputs' SHA-256, and the map's cells (carried to
//! longitude/latitude here, through `io::crs`).
//! `io::report_html` renders it; the CLI writes it as `qa-report.json` and `qa-report.html`.

use super::load::Loaded;
use super::reduce::RunSummary;
use crate::compute::qa::{
    round_nearest, summarise_group, GroupSummary, METRE_DECIMALS, RATIO_BINS, RATIO_BIN_WIDTH,
};
use crate::compute::qa_report::{
    failing, GaugeInput, GaugeQc, GaugeTrace, LineSummary, MapGauge, MapMark, MapPoint,
    PairDifference, QaReport, RatioHistogram, ReportProvenance, UncertaintyInputs, ZoneInput,
    ZoneTideSeries, QA_SCHEMA,
};
use crate::compute::reduce::SoundingStatus;
use crate::compute::uncertainty::{tide_budget, zone_datum_u, K95};
use crate::io::crs::Transformer;
use crate::io::timefmt::utc_label;

/// Step of the tide series in the report, minutes.
pub const TIDE_SERIES_STEP_MIN: f64 = 5.0;

/// Builds the QA report; `None` when the run computed no uncertainty. An input file that can no
/// longer be read for its SHA-256 is an error: the report would not say what it was made from.
pub fn build_qa_report(
    loaded: &Loaded,
    run: &RunSummary,
) -> Result<Option<QaReport>, crate::io::error::IoError> {
    let (Some(u), Some(mut qa)) = (loaded.uncertainty.as_ref(), run.qa.clone()) else {
        return Ok(None);
    };
    qa.settle();
    let qa = &qa;
    let acc = u.acceptance_share;
    let sum =
        |id: &str, g, b, t| summarise_group(id, g, b, t, &u.orders, u.n_builtin, u.chosen, acc);
    let zone_defaults: Vec<Vec<String>> = loaded
        .zones
        .iter()
        .map(|z| zone_defaulted_inputs(loaded, z, &u.defaulted))
        .collect();
    let mut survey = sum(
        "survey",
        &qa.overall,
        Some(&qa.overall_budget),
        &qa.overall_tally,
    );
    survey.defaulted_inputs = u.defaulted.clone();
    let zones: Vec<GroupSummary> = loaded
        .zones
        .iter()
        .zip(&qa.zones)
        .zip(&zone_defaults)
        .map(|((z, (g, b, t)), d)| {
            let mut s = sum(&z.id, g, Some(b), t);
            s.defaulted_inputs = d.clone();
            s
        })
        .collect();
    let lines: Vec<LineSummary> = qa
        .lines
        .iter()
        .map(|(id, l)| {
            let mut group = sum(id, &l.qa, Some(&l.budget), &l.tally);
            let mut d: Vec<String> = Vec::new();
            for &z in &l.zones {
                for x in &zone_defaults[z] {
                    if !d.contains(x) {
                        d.push(x.clone());
                    }
                }
            }
            group.defaulted_inputs = d;
            LineSummary {
                group,
                files: l.files.iter().cloned().collect(),
                first_utc: l.span_s.map(|(a, _)| utc_label(a)),
                last_utc: l.span_s.map(|(_, b)| utc_label(b)),
                zones_crossed: l
                    .zones
                    .iter()
                    .map(|&z| loaded.zones[z].id.clone())
                    .collect(),
            }
        })
        .collect();
    let continuous = loaded
        .field
        .as_ref()
        .filter(|_| run.tide_model != "correction_file");
    let mut tide_series = match (run.time_range_s, continuous) {
        (Some((t0, t1)), None) => tide_series(loaded, t0, t1),
        (Some((t0, t1)), Some(f)) => continuous_tide_series(loaded, f, t0, t1),
        (None, _) => Vec::new(),
    };
    for (s, z) in tide_series.iter_mut().zip(&run.zones) {
        s.gauges = z.gauges.clone();
    }
    // A continuous tide has no steps at zone edges.
    let boundary_steps = match continuous {
        None => boundary_steps_of(loaded, &tide_series, run.time_range_s),
        Some(_) => Vec::new(),
    };
    let groups = &loaded.project.spec.soundings;
    let transformers: Vec<Option<Transformer>> = groups
        .iter()
        .map(|g| Transformer::new(&g.crs, "EPSG:4326").ok())
        .collect();
    let mut map_points = Vec::with_capacity(qa.cells.len());
    for (_, c) in qa.sorted_cells() {
        let marks = [
            c.worst.map(|m| (m, MapMark::Judged(m.value))),
            c.drying.map(|m| (m, MapMark::Drying)),
            c.unreduced.map(|m| {
                let st = SoundingStatus::ALL
                    .get(m.value as usize)
                    .map_or("bad_input", |s| s.as_str());
                (m, MapMark::Unreduced(st))
            }),
        ];
        for (m, mark) in marks.into_iter().flatten() {
            if let Some(Some(t)) = transformers.get(m.group) {
                if let Ok((lon, lat)) = t.convert(m.x, m.y) {
                    map_points.push(MapPoint { lon, lat, mark });
                }
            }
        }
    }
    let soundings: Vec<(&std::path::Path, Option<&str>)> = run
        .files
        .iter()
        .map(|f| (f.input.as_path(), f.input_sha256.as_deref()))
        .collect();
    let inputs =
        crate::run::provenance::input_files(loaded, &soundings, run.correction_file.as_deref())?;
    let map_gauges = loaded
        .project
        .spec
        .gauges
        .iter()
        .map(|g| MapGauge {
            id: g.id.clone(),
            lon: g.lon,
            lat: g.lat,
            virtual_gauge: false,
        })
        .chain(loaded.project.spec.virtual_gauges.iter().map(|v| MapGauge {
            id: v.id.clone(),
            lon: v.lon,
            lat: v.lat,
            virtual_gauge: true,
        }))
        .collect();
    let gauge_traces = run
        .time_range_s
        .map(|p| gauge_traces(loaded, p))
        .unwrap_or_default();
    let gauge_differences = run
        .time_range_s
        .map(|p| pair_differences(loaded, p))
        .unwrap_or_default();
    Ok(Some(QaReport {
        schema: QA_SCHEMA,
        ebbwise_version: env!("CARGO_PKG_VERSION"),
        project_name: loaded.project.spec.name.clone(),
        project_file: loaded.project.path.display().to_string(),
        caution: crate::CAUTION,
        tide_model: run.tide_model,
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
        failing_lines: lines.iter().map(|l| &l.group).filter_map(failing).collect(),
        ratio_histogram: RatioHistogram {
            bin_width: RATIO_BIN_WIDTH,
            counts: qa.overall.ratio_hist[..RATIO_BINS].to_vec(),
        },
        survey,
        zones,
        lines,
        no_zone: qa.no_zone.by_status,
        tide_series,
        boundary_steps,
        qc_ran: loaded.project.spec.qc.enabled,
        qc_gauges: loaded
            .gauges
            .iter()
            .zip(&loaded.records)
            .zip(&loaded.qc)
            .map(|((g, r), q)| GaugeQc {
                gauge: g.id.clone(),
                samples: r.times_s.len(),
                set_aside: q.as_ref().map(|q| q.flags.len() - q.usable_count()),
            })
            .collect(),
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
            tide_field: continuous.map(|f| {
                let fu = &f.setup.field_u;
                crate::compute::qa_report::TideFieldInput {
                    mode: f.setup.mode.as_str(),
                    dominant: f.setup.dominant.name(),
                    u_field_m: fu.u_field_m,
                    field_scale_km: fu.field_scale_m / 1000.0,
                    u_station_range_ratio: fu.u_station_range_ratio,
                    u_station_time_min: fu.u_station_time_min,
                    stations: f.stations.iter().map(|s| s.id.clone()).collect(),
                    blended_gauges: f
                        .setup
                        .blend_gauges
                        .iter()
                        .map(|(g, _)| loaded.gauges[*g].id.clone())
                        .collect(),
                }
            }),
            zones: loaded
                .zones
                .iter()
                .zip(&u.zone_u)
                .filter(|_| continuous.is_none())
                .map(|(z, x)| {
                    let (u_datum_m, from) = zone_datum_u(z, &u.gauge_u, x);
                    // Written to the 4 decimals of every uncertainty (it may be computed).
                    let u_datum_m = (u_datum_m * 1e4).round() / 1e4;
                    ZoneInput {
                        zone: z.id.clone(),
                        u_time_corrector_min: x.u_time_corrector_min,
                        u_range_ratio: x.u_range_ratio,
                        u_zone_m: x.u_zone_m,
                        u_datum_m,
                        datum_from: from.as_str(),
                    }
                })
                .collect(),
            sounding_a_m: u.sounding_model.a_m,
            sounding_b: u.sounding_model.b,
            defaulted: u.defaulted.clone(),
        },
        provenance: ReportProvenance {
            ebbwise_version: env!("CARGO_PKG_VERSION"),
            created_utc: chrono::Utc::now().format("%Y-%m-%dT%H:%M:%SZ").to_string(),
            project_file: loaded.project.path.display().to_string(),
            inputs,
        },
        gauge_differences,
        exports: run
            .exports
            .iter()
            .filter_map(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
            .collect(),
        map_points,
        map_cells_across: crate::compute::qa::MAP_CELLS_ACROSS,
        map_gauges,
        gauge_traces,
        zone_polygons: loaded
            .zoning
            .zones
            .iter()
            .map(|z| (z.id.clone(), z.polygon_lonlat.clone()))
            .collect(),
    }))
}

/// The tide step across each shared zone edge (`compute::boundary`), from the zones' tide
/// series, over the instants within `period` (the survey period: the soundings' time span; the
/// series' grid may start and end up to a step beyond it).
pub fn boundary_steps_of(
    loaded: &Loaded,
    series: &[ZoneTideSeries],
    period: Option<(f64, f64)>,
) -> Vec<crate::compute::boundary::BoundaryStep> {
    if series.len() != loaded.zoning.zones.len() {
        return Vec::new();
    }
    let tides: Vec<Vec<Option<f64>>> = series.iter().map(|s| s.tide_m.clone()).collect();
    let Some(times) = series.first().map(|s| s.times_s.clone()) else {
        return Vec::new();
    };
    boundary_steps_from(&loaded.zoning, &times, &tides, period)
}

/// The tide step across each shared edge of `zoning`'s zones, from their tides `tides[zone][k]`
/// at `times_s[k]` (zones in the zoning's order), over the instants within `period` when given;
/// outlines in a local azimuthal equidistant projection centred on the zoning, each step's
/// edge carried back to longitude/latitude. Worst first.
pub fn boundary_steps_from(
    zoning: &crate::io::zoning_geojson::ZoningSpec,
    times_s: &[f64],
    tides: &[Vec<Option<f64>>],
    period: Option<(f64, f64)>,
) -> Vec<crate::compute::boundary::BoundaryStep> {
    use geo::BoundingRect;
    let zones = &zoning.zones;
    if tides.len() != zones.len() || zones.len() < 2 {
        return Vec::new();
    }
    let boxes: Vec<geo::Rect<f64>> = zones
        .iter()
        .filter_map(|z| z.polygon_lonlat.bounding_rect())
        .collect();
    let Some(first) = boxes.first() else {
        return Vec::new();
    };
    let (mut lo, mut hi) = (first.min(), first.max());
    for b in &boxes {
        lo = geo::coord! { x: lo.x.min(b.min().x), y: lo.y.min(b.min().y) };
        hi = geo::coord! { x: hi.x.max(b.max().x), y: hi.y.max(b.max().y) };
    }
    let crs = crate::io::crs::local_metres_crs(0.5 * (lo.x + hi.x), 0.5 * (lo.y + hi.y));
    let (Ok(t), Ok(back)) = (
        Transformer::new("EPSG:4326", &crs),
        Transformer::new(&crs, "EPSG:4326"),
    ) else {
        return Vec::new();
    };
    let Ok(outlines) = zones
        .iter()
        .map(|z| t.polygon_from_lonlat(&z.polygon_lonlat))
        .collect::<Result<Vec<_>, _>>()
    else {
        return Vec::new();
    };
    let pairs = crate::compute::boundary::adjacent_pairs(&outlines);
    let ids: Vec<String> = zones.iter().map(|z| z.id.clone()).collect();
    let within: Vec<bool> = times_s
        .iter()
        .map(|t| period.is_none_or(|(a, b)| *t >= a && *t <= b))
        .collect();
    let tides: Vec<Vec<Option<f64>>> = tides
        .iter()
        .map(|z| {
            z.iter()
                .zip(&within)
                .map(|(v, w)| v.filter(|_| *w))
                .collect()
        })
        .collect();
    let mut steps = crate::compute::boundary::boundary_steps(&ids, times_s, &tides, &pairs);
    for s in &mut steps {
        s.max_at_utc = utc_label(s.max_at_s);
        s.max_step_m = round_nearest(s.max_step_m, METRE_DECIMALS);
        s.rms_step_m = round_nearest(s.rms_step_m, METRE_DECIMALS);
        s.max_depth_step_m = round_nearest(s.max_depth_step_m, METRE_DECIMALS);
        s.shared_m = s.shared_m.round();
        let (Some(a), Some(b)) = (
            ids.iter().position(|i| *i == s.zone_a),
            ids.iter().position(|i| *i == s.zone_b),
        ) else {
            continue;
        };
        s.edge_lonlat = crate::compute::boundary::shared_edge(&outlines[a], &outlines[b])
            .iter()
            .map(|part| {
                part.iter()
                    .filter_map(|(x, y)| back.convert(*x, *y).ok())
                    .map(|(lon, lat)| [(lon * 1e7).round() / 1e7, (lat * 1e7).round() / 1e7])
                    .collect()
            })
            .collect();
    }
    steps
}

/// Tide and U95 of a continuous tide on a regular grid over `[t0, t1]`, at a point inside each
/// zone (`geo`'s interior point: on the zone's area even where the zone is concave).
pub fn continuous_tide_series(
    loaded: &Loaded,
    f: &crate::run::fields::LoadedField,
    t0: f64,
    t1: f64,
) -> Vec<ZoneTideSeries> {
    use crate::compute::reduce::TideModel;
    use geo::InteriorPoint;
    let Some(u) = loaded.uncertainty.as_ref() else {
        return Vec::new();
    };
    let (Ok(plane), Ok(locator)) = (
        crate::run::fields::plane_field(&f.stations, "EPSG:4326"),
        crate::run::load::locator_for_crs(&loaded.zoning, "EPSG:4326"),
    ) else {
        return Vec::new();
    };
    let model = crate::compute::continuous::ContinuousTide {
        setup: &f.setup,
        plane: &plane,
        gauges: &loaded.gauges,
        locator: &locator,
        interp: loaded.interp.as_ref(),
        renormalise: loaded.project.spec.gap_fill.enabled
            && loaded.project.spec.gap_fill.renormalise_feeds,
        unc: Some(crate::compute::continuous::ContinuousU {
            gauge_u: &u.gauge_u,
            rates: &u.gauge_rates,
        }),
    };
    let step = TIDE_SERIES_STEP_MIN * 60.0;
    let start = (t0 / step).floor() * step;
    let n = (((t1 - start) / step).ceil() as usize + 1).min(20_000);
    let mut scratch = crate::compute::reduce::Scratch::default();
    loaded
        .zoning
        .zones
        .iter()
        .map(|z| {
            let mut s = ZoneTideSeries::with_capacity(&z.id, n);
            let at = z.polygon_lonlat.interior_point();
            for k in 0..n {
                let t = start + k as f64 * step;
                s.times_s.push(t);
                s.times_utc.push(utc_label(t));
                let got = at.map(|p| {
                    model.tide_at(
                        &crate::compute::reduce::Query {
                            x: p.x(),
                            y: p.y(),
                            t_s: t,
                            line: "",
                        },
                        &mut scratch,
                    )
                });
                match got {
                    Some(crate::compute::reduce::TideOutcome::Tide { tide_m, u, .. }) => {
                        s.tide_m.push(Some(round_nearest(tide_m, METRE_DECIMALS)));
                        s.u95_tide_m
                            .push(u.map(|u| round_nearest(K95 * u.u_tide_m, METRE_DECIMALS)));
                    }
                    _ => {
                        s.tide_m.push(None);
                        s.u95_tide_m.push(None);
                    }
                }
            }
            let has: Vec<bool> = s.tide_m.iter().map(Option::is_some).collect();
            if let Some(p) = at {
                s.gaps = crate::compute::qa_report::refine_gaps(&s.times_s, &has, 1.0, |t| {
                    let q = crate::compute::reduce::Query {
                        x: p.x(),
                        y: p.y(),
                        t_s: t,
                        line: "",
                    };
                    match model.tide_at(&q, &mut scratch) {
                        crate::compute::reduce::TideOutcome::Tide { .. } => None,
                        crate::compute::reduce::TideOutcome::NoData { why, .. } => Some(matches!(
                            why.why,
                            crate::compute::series::NoLevel::Flagged { .. }
                        )),
                        crate::compute::reduce::TideOutcome::NoCorrection { flagged, .. } => {
                            Some(flagged)
                        }
                        _ => Some(false),
                    }
                });
            }
            s
        })
        .collect()
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
            let mut s = ZoneTideSeries::with_capacity(&z.id, n);
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
                            &states,
                        );
                        s.tide_m.push(Some(round_nearest(tide, METRE_DECIMALS)));
                        s.u95_tide_m
                            .push(Some(round_nearest(K95 * b.u_tide_m(), METRE_DECIMALS)));
                    }
                    Err(_) => {
                        s.tide_m.push(None);
                        s.u95_tide_m.push(None);
                    }
                }
            }
            let has: Vec<bool> = s.tide_m.iter().map(Option::is_some).collect();
            s.gaps = crate::compute::qa_report::refine_gaps(&s.times_s, &has, 1.0, |t| {
                match z.tide_at(&loaded.gauges, loaded.interp.as_ref(), t, &mut states) {
                    Ok(_) => None,
                    Err(e) => Some(matches!(
                        e.why,
                        crate::compute::series::NoLevel::Flagged { .. }
                    )),
                }
            });
            s
        })
        .collect()
}

/// The uncertainty inputs of zone `z`'s tide that fell back to the project's defaults: the
/// zone's own and those of the gauges feeding it (entries of `defaulted`, as `load` words them).
fn zone_defaulted_inputs(
    loaded: &Loaded,
    z: &crate::compute::zoning::Zone,
    defaulted: &[String],
) -> Vec<String> {
    let zone = format!("zone {}: ", z.id);
    let gauges: Vec<String> = z
        .feeds
        .iter()
        .map(|f| format!("gauge {}: ", loaded.gauges[f.gauge].id))
        .collect();
    defaulted
        .iter()
        .filter(|d| d.starts_with(&zone) || gauges.iter().any(|g| d.starts_with(g.as_str())))
        .cloned()
        .collect()
}

/// Margin around the survey period in the tide plots' gauge samples, seconds.
const TRACE_MARGIN_S: f64 = 3600.0;

/// Each gauge's samples within the survey period (with an hour's margin): those used, those gap
/// filling added, and those quality control set aside.
fn gauge_traces(loaded: &Loaded, (t0, t1): (f64, f64)) -> Vec<GaugeTrace> {
    let within = |t: f64| t >= t0 - TRACE_MARGIN_S && t <= t1 + TRACE_MARGIN_S;
    loaded
        .gauges
        .iter()
        .enumerate()
        .map(|(gi, g)| {
            let s = &g.series;
            let mut tr = GaugeTrace {
                gauge: g.id.clone(),
                ..Default::default()
            };
            for (k, (&t, &h)) in s.times_s.iter().zip(&s.heights_m).enumerate() {
                if within(t) {
                    tr.used.push((t, h));
                    if s.fill.filled.get(k).copied().unwrap_or(false) {
                        tr.filled.push((t, h));
                    }
                }
            }
            if let (Some(q), Some(r)) = (&loaded.qc[gi], loaded.records.get(gi)) {
                for ((f, &t), &h) in q.flags.iter().zip(&r.times_s).zip(&r.heights_m) {
                    if !f.usable() && within(t) && h.is_finite() {
                        tr.flagged.push((t, h));
                    }
                }
            }
            tr
        })
        .collect()
}

/// The gauge pairs `ebbwise qc` compares (every pair feeding one zone, every gauge inside a
/// zone fed by another), their differences within the survey period.
fn pair_differences(loaded: &Loaded, (t0, t1): (f64, f64)) -> Vec<PairDifference> {
    crate::run::qc::gauge_comparisons(loaded)
        .into_iter()
        .filter_map(|(pair, c)| {
            let c = c?;
            let series: Vec<(f64, f64)> = c
                .times_s
                .iter()
                .zip(&c.diff_m)
                .filter(|(t, _)| **t >= t0 - TRACE_MARGIN_S && **t <= t1 + TRACE_MARGIN_S)
                .map(|(t, d)| (*t, *d))
                .collect();
            let n = series.len();
            let mean = if n > 0 {
                series.iter().map(|p| p.1).sum::<f64>() / n as f64
            } else {
                0.0
            };
            let max_abs = series.iter().map(|p| p.1.abs()).fold(0.0, f64::max);
            Some(PairDifference {
                pair,
                a: c.a.clone(),
                b: c.b.clone(),
                n,
                mean_m: round_nearest(mean, METRE_DECIMALS),
                max_abs_m: round_nearest(max_abs, METRE_DECIMALS),
                flagged: !c.findings.is_empty(),
                findings: c.findings.iter().map(|f| f.to_string()).collect(),
                series,
            })
        })
        .collect()
}
