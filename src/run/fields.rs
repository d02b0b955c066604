//! The co-tidal fields of a project: its gauges that name harmonic constants and its virtual
//! gauges, as stations in local metres; each zone's constants from the field and the
//! correctors they imply, beside the zoning's own (`ebbwise zones derive`, `ebbwise zones
//! compare`).
//!
//! **Local metres.** The field is built in an azimuthal equidistant projection centred on the
//! stations' mean position (PROJ `+proj=aeqd` on WGS 84): distances from the centre are true,
//! and over a survey area of tens of kilometres the scale error elsewhere is below 1e-5, far
//! inside what a tide field needs.
//!
//! **A zone's constants** are the complex mean of the field's constants at the points of a
//! square grid (`cell_m`) inside the zone, or at the zone's centroid when no grid point falls
//! inside; its derived correctors come from those, relative to each gauge that feeds it
//! (`compute::cotidal::derive_correctors`), with their range over the grid points.

use geo::{BoundingRect, Centroid, Contains};

use crate::compute::continuous::{Blend, Plane, PlaneField};
use crate::compute::cotidal::{
    derive_correctors, mean_constants, spring_difference_m, Field, Station, ZoneDerived,
    ZoneSkipped,
};
use crate::compute::harmonic::HarmonicConstants;
use crate::io::constants::read_constants;
use crate::io::crs::Transformer;
use crate::io::error::{Finding, Position};
use crate::io::project::Project;
use crate::io::zoning_geojson::{read_zoning_all, ZoningSpec};

/// A project's field and how to reach it.
#[derive(Debug)]
pub struct ProjectField {
    /// The field, in local metres.
    pub field: Field,
    /// WGS 84 longitude/latitude to local metres.
    pub to_local: Transformer,
    /// Local metres to WGS 84 longitude/latitude.
    pub to_lonlat: Transformer,
    /// The local projection (a PROJ string).
    pub local_crs: String,
    /// Gauges left out of the field (no constants), and other notes.
    pub notes: Vec<String>,
}

/// The constants of a constants file as levels above chart datum: `levels = "above the
/// record's zero"` adds the gauge's `zero_above_datum_m`; a file that does not say is taken as
/// above chart datum, with a note.
fn constants_above_chart_datum(
    path: &std::path::Path,
    zero_above_datum_m: Option<f64>,
    who: &str,
    notes: &mut Vec<String>,
) -> Result<HarmonicConstants, Finding> {
    let (file, mut k) = read_constants(path).map_err(Finding::from)?;
    match file.levels.as_deref() {
        Some(crate::io::constants::LEVELS_CHART_DATUM) => {}
        Some(crate::io::constants::LEVELS_RECORD_ZERO) => match zero_above_datum_m {
            Some(z) => k.z0_m += z,
            None => {
                return Err(Finding::error(
                    Position::file(path).field("levels"),
                    format!(
                        "{who}: these constants give levels above the record's zero, and a virtual gauge has no zero to tie them to chart datum"
                    ),
                ))
            }
        },
        _ => notes.push(format!(
            "{who}: the constants file does not say what its levels are above; taken as chart datum"
        )),
    }
    Ok(k)
}

/// A station of the project's field in WGS 84, before it is placed in a plane.
#[derive(Debug, Clone)]
pub struct LonLatStation {
    /// Gauge or virtual gauge id.
    pub id: String,
    /// Longitude, degrees.
    pub lon: f64,
    /// Latitude, degrees.
    pub lat: f64,
    /// Constants, levels above chart datum.
    pub constants: HarmonicConstants,
    /// The gauge (project order) it is; `None` for a virtual gauge.
    pub gauge: Option<usize>,
}

/// The project's stations: its gauges that name constants, then its virtual gauges; with the
/// notes (gauges left out, constants files that do not say their levels).
pub fn field_stations(
    project: &Project,
) -> Result<(Vec<LonLatStation>, Vec<String>), Vec<Finding>> {
    let mut notes = Vec::new();
    let mut errors = Vec::new();
    let mut found = Vec::new();
    for (gi, g) in project.spec.gauges.iter().enumerate() {
        let Some(c) = &g.constants else {
            notes.push(format!(
                "gauge '{}' names no constants: it is not a station of the field",
                g.id
            ));
            continue;
        };
        match constants_above_chart_datum(
            c,
            Some(g.zero_above_datum_m),
            &format!("gauge '{}'", g.id),
            &mut notes,
        ) {
            Ok(k) => found.push(LonLatStation {
                id: g.id.clone(),
                lon: g.lon,
                lat: g.lat,
                constants: k,
                gauge: Some(gi),
            }),
            Err(e) => errors.push(e),
        }
    }
    for v in &project.spec.virtual_gauges {
        match constants_above_chart_datum(
            &v.constants,
            None,
            &format!("virtual gauge '{}'", v.id),
            &mut notes,
        ) {
            Ok(k) => found.push(LonLatStation {
                id: v.id.clone(),
                lon: v.lon,
                lat: v.lat,
                constants: k,
                gauge: None,
            }),
            Err(e) => errors.push(e),
        }
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    Ok((found, notes))
}

/// Why a field cannot be placed in a soundings plane.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PlaneFieldError {
    /// A station cannot be converted to the soundings' CRS.
    #[error(transparent)]
    Crs(#[from] crate::io::crs::CrsError),
    /// The stations do not make a field.
    #[error("the co-tidal field cannot be built: {0}")]
    Field(#[from] crate::compute::cotidal::FieldError),
    /// The soundings' CRS does not measure in metres.
    #[error("the CRS '{crs}' does not measure in metres: stations {distance_km:.1} km apart are {plane:.4} of its units apart (degrees or feet?); a continuous tide needs a projected CRS in metres, or WGS 84 longitude/latitude")]
    NotMetres {
        /// The CRS.
        crs: String,
        /// The two stations' great-circle distance, kilometres.
        distance_km: f64,
        /// Their distance in the CRS's units.
        plane: f64,
    },
}

/// Great-circle distance on the sphere of the WGS 84 mean radius, metres.
fn great_circle_m(a: (f64, f64), b: (f64, f64)) -> f64 {
    const R_M: f64 = crate::compute::continuous::EARTH_MEAN_RADIUS_M;
    let (p1, p2) = (a.1.to_radians(), b.1.to_radians());
    let (dp, dl) = (p2 - p1, (b.0 - a.0).to_radians());
    let h = (dp / 2.0).sin().powi(2) + p1.cos() * p2.cos() * (dl / 2.0).sin().powi(2);
    2.0 * R_M * h.sqrt().asin()
}

/// The field and the recording gauges' blend in the plane of a soundings group's `crs`:
/// projected coordinates as they are, WGS 84 longitude/latitude in a local equirectangular
/// plane about the stations' mean position (`compute::continuous::Plane`).
pub fn plane_field(stations: &[LonLatStation], crs: &str) -> Result<PlaneField, PlaneFieldError> {
    let n = stations.len().max(1) as f64;
    let (lon0, lat0) = (
        stations.iter().map(|s| s.lon).sum::<f64>() / n,
        stations.iter().map(|s| s.lat).sum::<f64>() / n,
    );
    let plane = if crate::io::crs::is_wgs84_lonlat(crs) {
        Plane::lonlat(lon0, lat0)
    } else {
        Plane::Projected
    };
    let t = match plane {
        Plane::Projected => Some(Transformer::new("EPSG:4326", crs)?),
        Plane::LonLat { .. } => None,
    };
    let mut placed = Vec::with_capacity(stations.len());
    for s in stations {
        let (x_m, y_m) = match &t {
            Some(t) => t.convert(s.lon, s.lat)?,
            None => plane.to_plane(s.lon, s.lat),
        };
        placed.push(Station {
            id: s.id.clone(),
            x_m,
            y_m,
            constants: s.constants.clone(),
            is_virtual: s.gauge.is_none(),
        });
    }
    // A projected CRS must measure in metres (the field's uncertainty scale is in metres): the
    // two stations farthest apart, their distance in the plane against the great circle's
    // (a projection's scale error is a few parts in a thousand over a survey area; feet are
    // 3.28 times, degrees 1e-5 times).
    if let (Plane::Projected, Some(far)) = (
        plane,
        (1..stations.len())
            .map(|k| {
                (
                    k,
                    great_circle_m(
                        (stations[0].lon, stations[0].lat),
                        (stations[k].lon, stations[k].lat),
                    ),
                )
            })
            .max_by(|a, b| a.1.total_cmp(&b.1)),
    ) {
        let (k, gc) = far;
        let d = ((placed[k].x_m - placed[0].x_m).powi(2) + (placed[k].y_m - placed[0].y_m).powi(2))
            .sqrt();
        if gc > 100.0 && !(0.5..=2.0).contains(&(d / gc)) {
            return Err(PlaneFieldError::NotMetres {
                crs: crs.to_string(),
                distance_km: gc / 1000.0,
                plane: d,
            });
        }
    }
    let blend = Blend::new(
        placed
            .iter()
            .zip(stations)
            .filter(|(_, s)| s.gauge.is_some())
            .map(|(p, _)| p.clone())
            .collect(),
    );
    let field = Field::new(placed)?;
    Ok(PlaneField::new(field, blend, plane))
}

/// Builds the project's field from its gauges with `constants` and its virtual gauges.
pub fn project_field(project: &Project) -> Result<ProjectField, Vec<Finding>> {
    let (stations, mut notes) = field_stations(project)?;
    let found: Vec<(String, f64, f64, HarmonicConstants, bool)> = stations
        .into_iter()
        .map(|s| (s.id, s.lon, s.lat, s.constants, s.gauge.is_none()))
        .collect();
    let n = found.len().max(1) as f64;
    let lon0 = found.iter().map(|s| s.1).sum::<f64>() / n;
    let lat0 = found.iter().map(|s| s.2).sum::<f64>() / n;
    let local_crs = crate::io::crs::local_metres_crs(lon0, lat0);
    let at = Position::file(&project.path);
    let crs_err = |e: crate::io::crs::CrsError| vec![Finding::error(at.clone(), e.to_string())];
    let to_local = Transformer::new("EPSG:4326", &local_crs).map_err(crs_err)?;
    let to_lonlat = Transformer::new(&local_crs, "EPSG:4326").map_err(crs_err)?;
    let mut stations = Vec::new();
    for (id, lon, lat, constants, is_virtual) in found {
        let (x_m, y_m) = to_local.convert(lon, lat).map_err(crs_err)?;
        stations.push(Station {
            id,
            x_m,
            y_m,
            constants,
            is_virtual,
        });
    }
    let field = Field::new(stations).map_err(|e| {
        vec![Finding::error(
            at.clone(),
            format!("the co-tidal field cannot be built: {e} (gauges with `constants`, and [[virtual_gauge]] tables)"),
        )]
    })?;
    if !field.left_out().is_empty() {
        notes.push(format!(
            "constituents not held by every station, left out of the field: {}",
            field.left_out().join(", ")
        ));
    }
    Ok(ProjectField {
        field,
        to_local,
        to_lonlat,
        local_crs,
        notes,
    })
}

/// Each zone's derived correctors relative to each of its feeding gauges; `cell_m` is the
/// sampling grid's step.
pub fn derive_zones(
    pf: &ProjectField,
    zoning: &ZoningSpec,
    cell_m: f64,
) -> (Vec<ZoneDerived>, Vec<ZoneSkipped>) {
    let mut out = Vec::new();
    let mut skipped = Vec::new();
    for z in &zoning.zones {
        let skip = |gauge: &str, reason: String| ZoneSkipped {
            zone: z.id.clone(),
            gauge: gauge.to_string(),
            reason,
        };
        let poly = match pf.to_local.polygon_from_lonlat(&z.polygon_lonlat) {
            Ok(p) => p,
            Err(e) => {
                skipped.push(skip("", e.to_string()));
                continue;
            }
        };
        let mut pts = Vec::new();
        if let Some(b) = poly.bounding_rect() {
            let nx = ((b.width() / cell_m).floor() as usize).min(2000);
            let ny = ((b.height() / cell_m).floor() as usize).min(2000);
            for i in 0..=nx {
                for j in 0..=ny {
                    let p = geo::Point::new(
                        b.min().x + (i as f64 + 0.5) * cell_m,
                        b.min().y + (j as f64 + 0.5) * cell_m,
                    );
                    if poly.contains(&p) {
                        pts.push((p.x(), p.y()));
                    }
                }
            }
        }
        if pts.is_empty() {
            if let Some(c) = poly.centroid() {
                pts.push((c.x(), c.y()));
            }
        }
        let at: Vec<_> = pts
            .iter()
            .map(|(x, y)| pf.field.constants_at(*x, *y))
            .collect();
        let outside_hull_max_m = at.iter().map(|a| a.1.outside_by_m).fold(0.0, f64::max);
        let ks: Vec<HarmonicConstants> = at.into_iter().map(|a| a.0).collect();
        let Some(mean) = mean_constants(&ks) else {
            skipped.push(skip("", "the zone has no area".into()));
            continue;
        };
        for feed in &z.feeds {
            let Some(gi) = pf.field.stations().iter().position(|s| s.id == feed.gauge) else {
                skipped.push(skip(
                    &feed.gauge,
                    "the gauge names no constants, so it is not a station of the field".into(),
                ));
                continue;
            };
            let gk = &pf.field.constants_with(&crate::compute::cotidal::Weights {
                w: vec![(gi, 1.0)],
                outside_by_m: 0.0,
            });
            let derived = match derive_correctors(&mean, gk) {
                Ok(d) => d,
                Err(e) => {
                    skipped.push(skip(&feed.gauge, e.to_string()));
                    continue;
                }
            };
            let zoning_c = (feed.time_corrector_min, feed.range_ratio);
            let mut t_range = (f64::INFINITY, f64::NEG_INFINITY);
            let mut r_range = (f64::INFINITY, f64::NEG_INFINITY);
            let mut worst = 0.0f64;
            for k in &ks {
                if let Ok(d) = derive_correctors(k, gk) {
                    t_range = (
                        t_range.0.min(d.time_corrector_min),
                        t_range.1.max(d.time_corrector_min),
                    );
                    r_range = (r_range.0.min(d.range_ratio), r_range.1.max(d.range_ratio));
                    if let Some(s) = spring_difference_m(
                        gk,
                        derived.dominant,
                        zoning_c,
                        (d.time_corrector_min, d.range_ratio),
                    ) {
                        worst = worst.max(s);
                    }
                }
            }
            let spring = spring_difference_m(
                gk,
                derived.dominant,
                zoning_c,
                (derived.time_corrector_min, derived.range_ratio),
            )
            .unwrap_or(f64::NAN);
            out.push(ZoneDerived {
                zone: z.id.clone(),
                gauge: feed.gauge.clone(),
                weight: feed.weight,
                zoning: zoning_c,
                zoning_mean_level_m: z.mean_level_above_datum_m,
                derived,
                time_corrector_range_min: t_range,
                range_ratio_range: r_range,
                worst_spring_difference_m: worst,
                spring_difference_m: spring,
                outside_hull_max_m,
                points: ks.len(),
            });
        }
    }
    (out, skipped)
}

/// Reads the project's zoning for [`derive_zones`].
pub fn zoning_of(project: &Project) -> Result<ZoningSpec, Vec<Finding>> {
    let z = read_zoning_all(&project.spec.zoning).map_err(|e| vec![Finding::from(e)])?;
    if !z.errors.is_empty() {
        return Err(z.errors.clone());
    }
    Ok(z)
}

/// A project's continuous tide (`[tide_field]`), ready to be placed in each soundings plane.
#[derive(Debug)]
pub struct LoadedField {
    /// The plane-independent model.
    pub setup: crate::compute::continuous::ContinuousSetup,
    /// Its stations in WGS 84 (same order as the setup's).
    pub stations: Vec<LonLatStation>,
}

/// Prediction margin beyond the gauge records' span, seconds (a day): a sounding's tide in the
/// astronomical mode needs the stations' predictions at its time.
pub const PREDICTION_MARGIN_S: f64 = 86_400.0;

/// The continuous tide of `[tide_field]` from the project's stations and its gauges (their
/// records' span sets the predictions' span); the notes say what the field left out.
pub fn loaded_field(
    project: &Project,
    spec: &crate::io::project::TideFieldSpec,
    gauges: &[crate::compute::zoning::Gauge],
) -> Result<(LoadedField, Vec<String>), Vec<Finding>> {
    use crate::compute::continuous::{ContinuousMode, ContinuousSetup, FieldU};
    use crate::io::project::{
        TideFieldMode, DEFAULT_FIELD_SCALE_KM, DEFAULT_U_FIELD_M, DEFAULT_U_STATION_RANGE_RATIO,
        DEFAULT_U_STATION_TIME_MIN,
    };
    let at = Position::file(&project.path).field("tide_field");
    let (stations, mut notes) = field_stations(project)?;
    let pf = plane_field(&stations, "EPSG:4326")
        .map_err(|e| vec![Finding::error(at.clone(), e.to_string())])?;
    if !pf.field.left_out().is_empty() {
        notes.push(format!(
            "constituents not held by every station, left out of the field: {}",
            pf.field.left_out().join(", ")
        ));
    }
    let span = gauges
        .iter()
        .filter_map(|g| Some((*g.series.times_s.first()?, *g.series.times_s.last()?)))
        .fold(None, |acc: Option<(f64, f64)>, (a, b)| match acc {
            None => Some((a, b)),
            Some((x, y)) => Some((x.min(a), y.max(b))),
        })
        .unwrap_or((0.0, 0.0));
    let mode = match spec.mode {
        TideFieldMode::CorrectorField => ContinuousMode::CorrectorField,
        TideFieldMode::AstronomicalResidual => ContinuousMode::AstronomicalResidual,
    };
    let field_u = FieldU {
        u_field_m: spec.u_field_m.unwrap_or(DEFAULT_U_FIELD_M),
        field_scale_m: spec.field_scale_km.unwrap_or(DEFAULT_FIELD_SCALE_KM) * 1000.0,
        u_station_range_ratio: spec
            .u_station_range_ratio
            .unwrap_or(DEFAULT_U_STATION_RANGE_RATIO),
        u_station_time_min: spec
            .u_station_time_min
            .unwrap_or(DEFAULT_U_STATION_TIME_MIN),
    };
    let setup = ContinuousSetup::new(
        mode,
        &pf.field,
        stations.iter().map(|s| s.gauge).collect(),
        (span.0 - PREDICTION_MARGIN_S, span.1 + PREDICTION_MARGIN_S),
        field_u,
    )
    .map_err(|e| {
        vec![Finding::error(
            at.clone(),
            format!("the continuous tide cannot be set up: {e}"),
        )]
    })?;
    Ok((LoadedField { setup, stations }, notes))
}

/// The `[tide_field]` inputs that fell back to their defaults, worded as the budget's
/// `defaulted` list words them.
pub fn tide_field_defaults(spec: &crate::io::project::TideFieldSpec) -> Vec<String> {
    [
        ("u_field_m", spec.u_field_m.is_none()),
        ("field_scale_km", spec.field_scale_km.is_none()),
        (
            "u_station_range_ratio",
            spec.u_station_range_ratio.is_none(),
        ),
        ("u_station_time_min", spec.u_station_time_min.is_none()),
    ]
    .into_iter()
    .filter(|(_, d)| *d)
    .map(|(k, _)| format!("tide field: {k}"))
    .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::astro::constituent;

    fn stations() -> Vec<LonLatStation> {
        [(-36.10, -47.55), (-36.00, -47.55), (-36.05, -47.48)]
            .iter()
            .enumerate()
            .map(|(i, &(lon, lat))| LonLatStation {
                id: format!("s{i}"),
                lon,
                lat,
                constants: HarmonicConstants {
                    z0_m: 2.0,
                    constituents: vec![(constituent("M2").unwrap(), 1.2, 10.0 * i as f64)],
                },
                gauge: Some(i),
            })
            .collect()
    }

    /// A projected CRS in metres places the field (UTM zone 24S over the stations); a CRS in
    /// degrees that is not WGS 84 longitude/latitude (ETRS89, EPSG:4258) is refused, since the
    /// field's scale and uncertainty are in metres (common practice: a projected survey CRS is in
    /// metres; the check compares the stations' distance with the great circle's).
    #[test]
    fn a_crs_not_in_metres_is_refused() {
        let pf = plane_field(&stations(), "EPSG:32724").unwrap();
        assert_eq!(pf.plane, Plane::Projected);
        let e = plane_field(&stations(), "EPSG:4258").unwrap_err();
        assert!(matches!(e, PlaneFieldError::NotMetres { .. }), "{e}");
        assert!(e.to_string().contains("EPSG:4258"), "{e}");
        let lonlat = plane_field(&stations(), "EPSG:4326").unwrap();
        assert!(matches!(lonlat.plane, Plane::LonLat { .. }));
    }
}
