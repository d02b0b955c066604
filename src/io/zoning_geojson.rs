//! Reading a zoning from GeoJSON (RFC 7946: WGS 84, `[longitude, latitude]`).
//!
//! Each feature is one zone: a Polygon or MultiPolygon with these properties (names are ebbwise's):
//!
//! | property | meaning |
//! |---|---|
//! | `zone` | zone identifier (text, unique) |
//! | `gauge` | reference gauge id, for a zone fed by one gauge |
//! | `time_corrector_min` | time corrector Δt, minutes, positive: tide arrives later than at the gauge |
//! | `range_ratio` | range ratio R (zone range / gauge range) |
//! | `feeds` | instead of the three above: a list of `{gauge, weight, time_corrector_min, range_ratio}` for a zone fed by several gauges (weights sum to 1) |
//! | `mean_level_above_datum_m` | optional zone mean level above chart datum `M_z`; present: zone-mean form, absent: scaled form |
//! | `u_time_corrector_min` | optional standard uncertainty of the time corrector(s), minutes |
//! | `u_range_ratio` | optional standard uncertainty of the range ratio(s) |
//! | `u_zone_m` | optional spatial standard uncertainty the zoning does not capture, metres |
//!
//! Problems are reported as `file: field 'features[i].properties.name': zone 'id': …`, and
//! geometry problems at `features[i].geometry`.

use std::path::Path;

use geo::{MultiPolygon, Polygon};
use serde_json::{Map, Value};

use super::error::{Finding, IoError, Position};

/// One gauge's correctors for a zone, as written (gauge by id).
#[derive(Debug, Clone, PartialEq)]
pub struct FeedSpec {
    /// Gauge id.
    pub gauge: String,
    /// Weight in the zone.
    pub weight: f64,
    /// Time corrector, minutes.
    pub time_corrector_min: f64,
    /// Range ratio.
    pub range_ratio: f64,
}

/// One zone as written.
#[derive(Debug, Clone)]
pub struct ZoneSpec {
    /// Zone id.
    pub id: String,
    /// 0-based feature index in the file.
    pub feature_index: usize,
    /// Polygon, WGS 84 longitude/latitude.
    pub polygon_lonlat: MultiPolygon<f64>,
    /// Feeding gauges.
    pub feeds: Vec<FeedSpec>,
    /// Zone mean level above chart datum, metres, when given.
    pub mean_level_above_datum_m: Option<f64>,
    /// Standard uncertainty of the time corrector(s), minutes, when given.
    pub u_time_corrector_min: Option<f64>,
    /// Standard uncertainty of the range ratio(s), when given.
    pub u_range_ratio: Option<f64>,
    /// Spatial standard uncertainty, metres, when given.
    pub u_zone_m: Option<f64>,
    /// Rings that were not closed in the file (first position ≠ last): feature-relative
    /// descriptions, for validation.
    pub unclosed_rings: Vec<String>,
}

/// A zoning as written.
#[derive(Debug, Clone)]
pub struct ZoningSpec {
    /// Zones in file order.
    pub zones: Vec<ZoneSpec>,
    /// Members that are not read but look like a misspelling of one that is (warnings).
    pub warnings: Vec<Finding>,
}

/// The properties of a zone that ebbwise reads.
pub const ZONE_PROPERTIES: [&str; 9] = [
    "zone",
    "gauge",
    "time_corrector_min",
    "range_ratio",
    "feeds",
    "mean_level_above_datum_m",
    "u_time_corrector_min",
    "u_range_ratio",
    "u_zone_m",
];

/// The members of one entry of `feeds`.
pub const FEED_MEMBERS: [&str; 4] = ["gauge", "weight", "time_corrector_min", "range_ratio"];

/// `key` is missing from `props`: "missing", with the present unknown member that looks like a
/// misspelling of it (`known` are the members read here).
fn missing(props: &Map<String, Value>, key: &str, known: &[&str]) -> String {
    let near = props
        .keys()
        .filter(|k| !known.contains(&k.as_str()))
        .find(|k| crate::compute::names::nearest(k, [key]).is_some());
    match near {
        Some(k) => format!("missing; unknown property '{k}': did you mean '{key}'?"),
        None => "missing".into(),
    }
}

fn num(
    props: &Map<String, Value>,
    key: &str,
    known: &[&str],
    at: &dyn Fn(&str) -> Position,
) -> Result<f64, IoError> {
    match props.get(key) {
        Some(Value::Number(n)) => n
            .as_f64()
            .filter(|v| v.is_finite())
            .ok_or_else(|| IoError::content(at(key), "expected a finite number")),
        Some(other) => Err(IoError::content(
            at(key),
            format!("expected a number, found {other}"),
        )),
        None => Err(IoError::content(at(key), missing(props, key, known))),
    }
}

fn text(
    props: &Map<String, Value>,
    key: &str,
    known: &[&str],
    at: &dyn Fn(&str) -> Position,
) -> Result<String, IoError> {
    match props.get(key) {
        Some(Value::String(s)) if !s.trim().is_empty() => Ok(s.clone()),
        Some(other) => Err(IoError::content(
            at(key),
            format!("expected a non-empty text, found {other}"),
        )),
        None => Err(IoError::content(at(key), missing(props, key, known))),
    }
}

/// Warnings for members of `obj` that ebbwise does not read but that look like a misspelling
/// of one it reads and that is absent (other members are free: GeoJSON properties often carry
/// names and styles from the tool that drew the zoning).
fn near_misses(
    obj: &Map<String, Value>,
    known: &[&str],
    at: &dyn Fn(&str) -> Position,
    zone: &str,
    out: &mut Vec<Finding>,
) {
    for k in obj.keys().filter(|k| !known.contains(&k.as_str())) {
        if let Some(n) = crate::compute::names::nearest(k, known.iter().copied()) {
            if !obj.contains_key(n) {
                out.push(Finding::warning(
                    at(k),
                    format!("zone '{zone}': unknown property '{k}', ignored: did you mean '{n}'?"),
                ));
            }
        }
    }
}

/// Reads a zoning file.
pub fn read_zoning(path: &Path) -> Result<ZoningSpec, IoError> {
    let bytes = std::fs::read(path).map_err(|e| IoError::file(path, e))?;
    parse_zoning(&bytes, path)
}

/// Parses zoning bytes as if read from `path`.
pub fn parse_zoning(bytes: &[u8], path: &Path) -> Result<ZoningSpec, IoError> {
    let root: Value = serde_json::from_slice(bytes).map_err(|e| {
        IoError::content(
            Position::file(path).line(e.line() as u64),
            format!("not valid JSON: {e}"),
        )
    })?;
    let features = match root.get("features") {
        Some(Value::Array(a))
            if root.get("type") == Some(&Value::String("FeatureCollection".into())) =>
        {
            a
        }
        _ => {
            return Err(IoError::content(
                Position::file(path),
                "expected a GeoJSON FeatureCollection with a 'features' list",
            ))
        }
    };
    let mut zones = Vec::with_capacity(features.len());
    let mut warnings = Vec::new();
    let mut ids = std::collections::HashMap::new();
    for (i, f) in features.iter().enumerate() {
        let pos = |k: &str| Position::file(path).field(format!("features[{i}].{k}"));
        let props = match f.get("properties") {
            Some(Value::Object(m)) => m,
            _ => {
                return Err(IoError::content(
                    pos("properties"),
                    "expected an object of zone properties",
                ))
            }
        };
        let id = text(props, "zone", &ZONE_PROPERTIES, &|k| {
            pos(&format!("properties.{k}"))
        })?;
        let at = |k: &str| pos(&format!("properties.{k}"));
        if let Some(prev) = ids.insert(id.clone(), i) {
            return Err(IoError::content(
                at("zone"),
                format!("zone id '{id}' is used by features {prev} and {i}"),
            ));
        }
        near_misses(props, &ZONE_PROPERTIES, &at, &id, &mut warnings);
        let ZoneProperties {
            feeds,
            mean_level_above_datum_m,
            u_time_corrector_min,
            u_range_ratio,
            u_zone_m,
        } = zone_properties(props, &at, &id, &mut warnings).map_err(|e| match e {
            IoError::Content { at, message } => {
                IoError::content(at, format!("zone '{id}': {message}"))
            }
            other => other,
        })?;
        let geom = f.get("geometry").ok_or_else(|| {
            IoError::content(pos("geometry"), format!("zone '{id}' has no geometry"))
        })?;
        let (polygon_lonlat, unclosed_rings) = geometry(geom)
            .map_err(|m| IoError::content(pos("geometry"), format!("zone '{id}': {m}")))?;
        zones.push(ZoneSpec {
            id,
            feature_index: i,
            polygon_lonlat,
            feeds,
            mean_level_above_datum_m,
            u_time_corrector_min,
            u_range_ratio,
            u_zone_m,
            unclosed_rings,
        });
    }
    if zones.is_empty() {
        return Err(IoError::content(
            Position::file(path),
            "the zoning holds no zone",
        ));
    }
    Ok(ZoningSpec { zones, warnings })
}

/// A zone's properties other than its id.
struct ZoneProperties {
    feeds: Vec<FeedSpec>,
    mean_level_above_datum_m: Option<f64>,
    u_time_corrector_min: Option<f64>,
    u_range_ratio: Option<f64>,
    u_zone_m: Option<f64>,
}

/// Reads a zone's properties other than its id (the messages say nothing of the zone: the
/// caller adds its id).
fn zone_properties(
    props: &Map<String, Value>,
    at: &dyn Fn(&str) -> Position,
    id: &str,
    warnings: &mut Vec<Finding>,
) -> Result<ZoneProperties, IoError> {
    let feeds = match props.get("feeds") {
        Some(Value::Array(list)) => {
            if props.contains_key("gauge") {
                return Err(IoError::content(
                    at("gauge"),
                    "give either 'gauge' with its correctors or 'feeds', not both",
                ));
            }
            if list.is_empty() {
                return Err(IoError::content(at("feeds"), "expected at least one feed"));
            }
            let mut out = Vec::new();
            for (k, item) in list.iter().enumerate() {
                let fat = |key: &str| at(&format!("feeds[{k}].{key}"));
                let Value::Object(m) = item else {
                    return Err(IoError::content(
                        at(&format!("feeds[{k}]")),
                        "expected an object {gauge, weight, time_corrector_min, range_ratio}",
                    ));
                };
                near_misses(m, &FEED_MEMBERS, &fat, id, warnings);
                let feed = FeedSpec {
                    gauge: text(m, "gauge", &FEED_MEMBERS, &fat)?,
                    weight: num(m, "weight", &FEED_MEMBERS, &fat)?,
                    time_corrector_min: num(m, "time_corrector_min", &FEED_MEMBERS, &fat)?,
                    range_ratio: num(m, "range_ratio", &FEED_MEMBERS, &fat)?,
                };
                if feed.weight < 0.0 {
                    return Err(IoError::content(
                        fat("weight"),
                        format!("weight must not be negative, found {}", feed.weight),
                    ));
                }
                plausible_correctors(&feed, &fat, id, warnings)?;
                out.push(feed);
            }
            out
        }
        Some(_) => return Err(IoError::content(at("feeds"), "expected a list")),
        None => {
            let feed = FeedSpec {
                gauge: text(props, "gauge", &ZONE_PROPERTIES, at)?,
                weight: 1.0,
                time_corrector_min: num(props, "time_corrector_min", &ZONE_PROPERTIES, at)?,
                range_ratio: num(props, "range_ratio", &ZONE_PROPERTIES, at)?,
            };
            plausible_correctors(&feed, at, id, warnings)?;
            vec![feed]
        }
    };
    let mean_level_above_datum_m = match props.get("mean_level_above_datum_m") {
        None | Some(Value::Null) => None,
        Some(_) => Some(num(
            props,
            "mean_level_above_datum_m",
            &ZONE_PROPERTIES,
            at,
        )?),
    };
    let opt_u = |k: &str| -> Result<Option<f64>, IoError> {
        match props.get(k) {
            None | Some(Value::Null) => Ok(None),
            Some(_) => {
                let v = num(props, k, &ZONE_PROPERTIES, at)?;
                if v < 0.0 {
                    return Err(IoError::content(
                        at(k),
                        format!("a standard uncertainty cannot be negative, found {v}"),
                    ));
                }
                Ok(Some(v))
            }
        }
    };
    Ok(ZoneProperties {
        feeds,
        mean_level_above_datum_m,
        u_time_corrector_min: opt_u("u_time_corrector_min")?,
        u_range_ratio: opt_u("u_range_ratio")?,
        u_zone_m: opt_u("u_zone_m")?,
    })
}

/// Refuses a feed's time corrector or range ratio beyond the plausibility bounds of
/// [`crate::compute::zoning`] and warns on a large time corrector.
fn plausible_correctors(
    feed: &FeedSpec,
    at: &dyn Fn(&str) -> Position,
    id: &str,
    warnings: &mut Vec<Finding>,
) -> Result<(), IoError> {
    use crate::compute::zoning::{
        RANGE_RATIO_BAND, TIME_CORRECTOR_REFUSED_ABOVE_MIN, TIME_CORRECTOR_WARNED_ABOVE_MIN,
    };
    let dt = feed.time_corrector_min;
    if dt.abs() > TIME_CORRECTOR_REFUSED_ABOVE_MIN {
        return Err(IoError::content(
            at("time_corrector_min"),
            format!(
                "time corrector {} min is beyond the plausible ±{TIME_CORRECTOR_REFUSED_ABOVE_MIN} min (hours or seconds instead of minutes?)",
                short(dt)
            ),
        ));
    }
    if dt.abs() > TIME_CORRECTOR_WARNED_ABOVE_MIN {
        warnings.push(Finding::warning(
            at("time_corrector_min"),
            format!(
                "zone '{id}': time corrector {} min is larger than ±{TIME_CORRECTOR_WARNED_ABOVE_MIN} min: check it",
                short(dt)
            ),
        ));
    }
    let (lo, hi) = RANGE_RATIO_BAND;
    let r = feed.range_ratio;
    if !(lo..=hi).contains(&r) {
        return Err(IoError::content(
            at("range_ratio"),
            format!(
                "range ratio {} is outside the plausible band {lo} to {hi}",
                short(r)
            ),
        ));
    }
    Ok(())
}

/// A number as written in a message: plain, or in exponent form when very large or very small.
fn short(v: f64) -> String {
    if v != 0.0 && !(1e-3..1e6).contains(&v.abs()) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

/// What is wrong with a zone's geometry; the reader puts it at `features[i].geometry` with the
/// zone id. `ring` and `polygon` say which part, e.g. "polygon 1 hole 0".
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
enum GeometryError {
    #[error("geometry has no coordinates")]
    NoCoordinates,
    #[error("expected a Polygon or MultiPolygon geometry, found '{kind}'")]
    NotAPolygon { kind: String },
    #[error("expected a list of polygons")]
    NotPolygons,
    #[error("{polygon}: expected a list of rings")]
    NotRings { polygon: String },
    #[error("{polygon}: polygon has no ring")]
    NoRing { polygon: String },
    #[error("{ring}: expected a list of positions")]
    NotPositions { ring: String },
    #[error("{ring}: position {k} is not [longitude, latitude]")]
    NotAPosition { ring: String, k: usize },
    #[error("{ring}: position {k} is not two finite numbers")]
    NotFinite { ring: String, k: usize },
    #[error("{ring}: position {k} [{x}, {y}] is not a longitude/latitude (GeoJSON is [lon, lat] in degrees)")]
    NotLonLat {
        ring: String,
        k: usize,
        x: f64,
        y: f64,
    },
    #[error("{ring}: a ring needs at least 3 positions, found {n}")]
    TooFewPositions { ring: String, n: usize },
}

fn ring(
    v: &Value,
    what: &str,
    unclosed: &mut Vec<String>,
) -> Result<geo::LineString<f64>, GeometryError> {
    let Value::Array(pts) = v else {
        return Err(GeometryError::NotPositions { ring: what.into() });
    };
    let mut coords = Vec::with_capacity(pts.len());
    for (k, p) in pts.iter().enumerate() {
        let xy =
            p.as_array()
                .filter(|a| a.len() >= 2)
                .ok_or_else(|| GeometryError::NotAPosition {
                    ring: what.into(),
                    k,
                })?;
        let x = xy[0].as_f64().filter(|v| v.is_finite());
        let y = xy[1].as_f64().filter(|v| v.is_finite());
        let (Some(x), Some(y)) = (x, y) else {
            return Err(GeometryError::NotFinite {
                ring: what.into(),
                k,
            });
        };
        if !(-180.0..=180.0).contains(&x) || !(-90.0..=90.0).contains(&y) {
            return Err(GeometryError::NotLonLat {
                ring: what.into(),
                k,
                x,
                y,
            });
        }
        coords.push(geo::Coord { x, y });
    }
    if coords.len() < 3 {
        return Err(GeometryError::TooFewPositions {
            ring: what.into(),
            n: coords.len(),
        });
    }
    if coords.first() != coords.last() {
        unclosed.push(what.to_string());
    }
    Ok(geo::LineString::new(coords))
}

fn polygon(
    v: &Value,
    what: &str,
    unclosed: &mut Vec<String>,
) -> Result<Polygon<f64>, GeometryError> {
    let Value::Array(rings) = v else {
        return Err(GeometryError::NotRings {
            polygon: what.into(),
        });
    };
    if rings.is_empty() {
        return Err(GeometryError::NoRing {
            polygon: what.into(),
        });
    }
    let ext = ring(&rings[0], &format!("{what} exterior ring"), unclosed)?;
    let holes = rings[1..]
        .iter()
        .enumerate()
        .map(|(k, r)| ring(r, &format!("{what} hole {k}"), unclosed))
        .collect::<Result<Vec<_>, _>>()?;
    Ok(Polygon::new(ext, holes))
}

fn geometry(g: &Value) -> Result<(MultiPolygon<f64>, Vec<String>), GeometryError> {
    let mut unclosed = Vec::new();
    let kind = g.get("type").and_then(Value::as_str).unwrap_or("");
    let coords = g.get("coordinates").ok_or(GeometryError::NoCoordinates)?;
    let mp = match kind {
        "Polygon" => MultiPolygon(vec![polygon(coords, "polygon", &mut unclosed)?]),
        "MultiPolygon" => {
            let Value::Array(parts) = coords else {
                return Err(GeometryError::NotPolygons);
            };
            MultiPolygon(
                parts
                    .iter()
                    .enumerate()
                    .map(|(k, p)| polygon(p, &format!("polygon {k}"), &mut unclosed))
                    .collect::<Result<_, _>>()?,
            )
        }
        other => return Err(GeometryError::NotAPolygon { kind: other.into() }),
    };
    Ok((mp, unclosed))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(s: &str) -> Result<ZoningSpec, IoError> {
        parse_zoning(s.as_bytes(), Path::new("z.geojson"))
    }

    const ONE: &str = r#"{"type":"FeatureCollection","features":[
      {"type":"Feature","properties":{"zone":"A","gauge":"g1","time_corrector_min":12,"range_ratio":1.05},
       "geometry":{"type":"Polygon","coordinates":[[[0,0],[1,0],[1,1],[0,0]]]}},
      {"type":"Feature","properties":{"zone":"B","mean_level_above_datum_m":2.1,
        "feeds":[{"gauge":"g1","weight":0.7,"time_corrector_min":5,"range_ratio":1.0},
                 {"gauge":"g2","weight":0.3,"time_corrector_min":-3,"range_ratio":0.9}]},
       "geometry":{"type":"MultiPolygon","coordinates":[[[[1,0],[2,0],[2,1],[1,0]]]]}}]}"#;

    #[test]
    fn reads_single_and_multi_gauge_zones() {
        let z = parse(ONE).unwrap();
        assert_eq!(z.zones.len(), 2);
        assert_eq!(z.zones[0].feeds[0].time_corrector_min, 12.0);
        assert_eq!(z.zones[0].mean_level_above_datum_m, None);
        assert_eq!(z.zones[1].feeds.len(), 2);
        assert_eq!(z.zones[1].feeds[1].gauge, "g2");
        assert_eq!(z.zones[1].mean_level_above_datum_m, Some(2.1));
        assert!(z.zones[0].unclosed_rings.is_empty());
    }

    #[test]
    fn errors_name_the_feature_and_property() {
        let e = parse(&ONE.replace("\"range_ratio\":1.05", "\"range_ratio\":\"big\"")).unwrap_err();
        assert_eq!(
            e.to_string(),
            "z.geojson: field 'features[0].properties.range_ratio': zone 'A': expected a number, found \"big\""
        );
        let e = parse(&ONE.replace(
            "[[[0,0],[1,0],[1,1],[0,0]]]",
            "[[[50,0],[1,0],[1,100],[50,0]]]",
        ))
        .unwrap_err();
        assert!(e.to_string().contains("not a longitude/latitude"), "{e}");
        let e = parse("{\"type\":\"FeatureCollection\",\n\"features\":[}").unwrap_err();
        assert!(
            e.to_string().starts_with("z.geojson:2: not valid JSON"),
            "{e}"
        );
    }

    #[test]
    fn unclosed_rings_are_recorded() {
        let z = parse(&ONE.replace("[[[0,0],[1,0],[1,1],[0,0]]]", "[[[0,0],[1,0],[1,1],[0,1]]]"))
            .unwrap();
        assert_eq!(
            z.zones[0].unclosed_rings,
            vec!["polygon exterior ring".to_string()]
        );
    }
}
