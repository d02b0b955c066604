//! The co-tidal map of a project (`ebbwise zones map`): one constituent's co-tidal and co-range
//! lines over the stations' field, in local metres and WGS 84, with what the SVG map draws
//! beside them (zones, triangulation, stations, zone-boundary steps).
//!
//! **Grid.** The field is sampled every `cell_m` over the bounding box of the stations' hull and
//! of the zoning, widened by a margin of a tenth of its larger side. Inside the hull the field is
//! the stations' interpolation; outside it, the nearest hull edge's constants carried out
//! unchanged (`compute::cotidal`), so lines there say nothing the stations do not: each line is
//! split where it leaves the hull, and its parts outside are marked (`inside_hull: false` in the
//! GeoJSON, dashed on the map).
//!
//! **Zone-boundary steps** on the map come from the gauge records: the zones' tides every
//! [`super::qa_report::TIDE_SERIES_STEP_MIN`] minutes over the span the records have in common
//! (the map does not read the soundings; the QA report's steps are over the survey period), at
//! most [`MAX_STEP_INSTANTS`] instants from its start.

use geo::BoundingRect;

use crate::compute::cotidal::dominant;
use crate::compute::isolines::{amplitude_lines, phase_lines, sample_field, split_parts, IsoLine};
use crate::io::error::{Finding, Position};
use crate::io::project::Project;
use crate::io::zoning_geojson::ZoningSpec;

use super::fields::ProjectField;

/// Most instants of the zones' tides the map's boundary steps are computed over (69 days at
/// 5 minutes).
pub const MAX_STEP_INSTANTS: usize = 20_000;

pub use crate::compute::cotidal_map::{CotidalMap, MapLine, MapStation, MapStep, StepsOnMap};

/// Options of the map.
#[derive(Debug, Clone)]
pub struct MapOptions {
    /// The constituent; `None`: the dominant one by the form factor at the stations' centre.
    pub constituent: Option<String>,
    /// Co-tidal lines every this many degrees.
    pub phase_step_deg: f64,
    /// Co-range lines every this many metres.
    pub amplitude_step_m: f64,
    /// Grid step, metres.
    pub cell_m: f64,
}

fn local_lines(lines: Vec<IsoLine>, pf: &ProjectField) -> Vec<MapLine> {
    let outside = |x: f64, y: f64| pf.field.weights(x, y).outside_by_m > 1e-6;
    lines
        .into_iter()
        .map(|l| {
            let (inside, out) = split_parts(&l.parts, &outside);
            MapLine {
                kind: l.kind,
                value: l.value,
                inside,
                outside: out,
            }
        })
        .collect()
}

/// The map's lines and drawing, without the zone-boundary steps (`steps` says they were not
/// computed yet; see [`add_steps`]).
pub fn cotidal_map(
    project: &Project,
    pf: &ProjectField,
    zoning: &ZoningSpec,
    opts: &MapOptions,
) -> Result<CotidalMap, Vec<Finding>> {
    let at = Position::file(&project.path);
    let err = |m: String| vec![Finding::error(at.clone(), m)];
    let st = pf.field.stations();
    let n = st.len() as f64;
    let (cx, cy) = (
        st.iter().map(|s| s.x_m).sum::<f64>() / n,
        st.iter().map(|s| s.y_m).sum::<f64>() / n,
    );
    let (constituent, by_ff) = match &opts.constituent {
        Some(c) => (c.to_ascii_uppercase(), false),
        None => (
            dominant(&pf.field.constants_at(cx, cy).0)
                .name()
                .to_string(),
            true,
        ),
    };
    if !pf
        .field
        .constituents()
        .iter()
        .any(|c| c.name == constituent)
    {
        return Err(err(format!(
            "--constituent {constituent}: not carried by the field (held by every station: {})",
            pf.field.constituent_names()
        )));
    }
    let mut zones = Vec::new();
    for z in &zoning.zones {
        match pf.to_local.polygon_from_lonlat(&z.polygon_lonlat) {
            Ok(p) => zones.push((z.id.clone(), p)),
            Err(e) => return Err(err(format!("zone '{}': {e}", z.id))),
        }
    }
    let (mut lo, mut hi) = (
        (f64::INFINITY, f64::INFINITY),
        (f64::NEG_INFINITY, f64::NEG_INFINITY),
    );
    let mut take = |x: f64, y: f64| {
        lo = (lo.0.min(x), lo.1.min(y));
        hi = (hi.0.max(x), hi.1.max(y));
    };
    for s in st {
        take(s.x_m, s.y_m);
    }
    for (_, p) in &zones {
        if let Some(b) = p.bounding_rect() {
            take(b.min().x, b.min().y);
            take(b.max().x, b.max().y);
        }
    }
    let margin = 0.1 * (hi.0 - lo.0).max(hi.1 - lo.1);
    let (lo, hi) = (
        (lo.0 - margin, lo.1 - margin),
        (hi.0 + margin, hi.1 + margin),
    );
    let (amp, phase) = sample_field(&pf.field, &constituent, lo, hi, opts.cell_m)
        .map_err(|e| err(format!("the co-tidal map's grid: {e} (--cell-m)")))?;
    let mut lines = local_lines(
        phase_lines(&phase, opts.phase_step_deg).map_err(|e| err(e.to_string()))?,
        pf,
    );
    lines.extend(local_lines(
        amplitude_lines(&amp, opts.amplitude_step_m).map_err(|e| err(e.to_string()))?,
        pf,
    ));
    let xy = |i: usize| (st[i].x_m, st[i].y_m);
    let triangles = pf
        .field
        .triangles()
        .iter()
        .map(|t| [xy(t[0]), xy(t[1]), xy(t[2])])
        .collect();
    let edges = pf.field.hull_edges();
    let mut hull: Vec<(f64, f64)> = edges.iter().map(|e| xy(e.0)).collect();
    if let Some(e) = edges.first() {
        hull.push(xy(e.0));
    }
    Ok(CotidalMap {
        constituent,
        constituent_by_form_factor: by_ff,
        phase_step_deg: opts.phase_step_deg,
        amplitude_step_m: opts.amplitude_step_m,
        cell_m: opts.cell_m,
        lines,
        zones,
        stations: st
            .iter()
            .map(|s| MapStation {
                id: s.id.clone(),
                x_m: s.x_m,
                y_m: s.y_m,
                is_virtual: s.is_virtual,
            })
            .collect(),
        triangles,
        hull,
        steps: StepsOnMap::NotDrawn {
            reason: "not computed".into(),
        },
        steps_span_s: None,
    })
}

/// Adds the zone-boundary steps from the project's gauge records; when the records cannot be
/// loaded, says why instead.
pub fn add_steps(map: &mut CotidalMap, project_path: &std::path::Path, pf: &ProjectField) {
    let loaded = match Project::load(project_path)
        .map_err(|e| e.to_string())
        .and_then(|p| {
            super::load::load(p, None).map_err(|f| {
                f.iter()
                    .find(|x| x.severity == crate::io::error::Severity::Error)
                    .or(f.first())
                    .map_or_else(
                        || "the project cannot be loaded".to_string(),
                        |x| x.to_string(),
                    )
            })
        }) {
        Ok(l) => l,
        Err(e) => {
            map.steps = StepsOnMap::NotDrawn {
                reason: format!("the gauge records could not be loaded: {e}"),
            };
            return;
        }
    };
    let starts = loaded.records.iter().filter_map(|r| r.times_s.first());
    let ends = loaded.records.iter().filter_map(|r| r.times_s.last());
    let t0 = starts.cloned().fold(f64::NEG_INFINITY, f64::max);
    let t1 = ends.cloned().fold(f64::INFINITY, f64::min);
    if !(t0.is_finite() && t1.is_finite() && t1 > t0) {
        map.steps = StepsOnMap::NotDrawn {
            reason: "the gauge records have no span in common".into(),
        };
        return;
    }
    let step_s = super::qa_report::TIDE_SERIES_STEP_MIN * 60.0;
    let start = (t0 / step_s).ceil() * step_s;
    let n = ((((t1 - start) / step_s).floor() as usize) + 1).min(MAX_STEP_INSTANTS);
    let times: Vec<f64> = (0..n).map(|k| start + k as f64 * step_s).collect();
    let mut states = Vec::new();
    let tides: Vec<Vec<Option<f64>>> = loaded
        .zones
        .iter()
        .map(|z| {
            times
                .iter()
                .map(|t| {
                    z.tide_at(&loaded.gauges, loaded.interp.as_ref(), *t, &mut states)
                        .ok()
                })
                .collect()
        })
        .collect();
    let steps = super::qa_report::boundary_steps_from(&loaded.zoning, &times, &tides, None);
    map.steps_span_s = times.first().zip(times.last()).map(|(a, b)| (*a, *b));
    map.steps = StepsOnMap::Drawn(
        steps
            .into_iter()
            .map(|s| {
                let edge_m = s
                    .edge_lonlat
                    .iter()
                    .map(|p| {
                        p.iter()
                            .filter_map(|c| pf.to_local.convert(c[0], c[1]).ok())
                            .collect()
                    })
                    .collect();
                MapStep { step: s, edge_m }
            })
            .collect(),
    );
}

/// A line in WGS 84 [longitude, latitude] (points that cannot be converted are left out).
pub fn to_lonlat(pf: &ProjectField, part: &[(f64, f64)]) -> Vec<[f64; 2]> {
    part.iter()
        .filter_map(|(x, y)| pf.to_lonlat.convert(*x, *y).ok())
        .map(|(lon, lat)| [lon, lat])
        .collect()
}
