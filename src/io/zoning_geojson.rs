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
//! | `u_datum_m` | optional standard uncertainty of chart datum at the zone (of `M_z`), metres; zone-mean form only |
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
    /// Standard uncertainty of chart datum at the zone (of `M_z`), metres, when given.
    pub u_datum_m: Option<f64>,
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
    /// Every problem of every feature ([`read_zoning_all`]); [`read_zoning`] and
    /// [`parse_zoning`] return the first as their error instead.
    pub errors: Vec<Finding>,
    /// The 0-based index of every feature left out of `zones` because of its errors.
    pub left_out: Vec<usize>,
}

/// The properties of a zone that ebbwise reads.
pub const ZONE_PROPERTIES: [&str; 10] = [
    "zone",
    "gauge",
    "time_corrector_min",
    "range_ratio",
    "feeds",
    "mean_level_above_datum_m",
    "u_time_corrector_min",
    "u_range_ratio",
    "u_zone_m",
    "u_datum_m",
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

/// Reads the properties of one zone (or one entry of `feeds`), collecting every problem instead
/// of stopping at the first: each is an error at the property's position, its message prefixed
/// with the zone's name when it is known.
struct Props<'a> {
    obj: &'a Map<String, Value>,
    known: &'a [&'a str],
    at: &'a dyn Fn(&str) -> Position,
    /// `"zone 'Z1': "`, or empty when the zone has no usable id.
    prefix: &'a str,
    errors: &'a mut Vec<Finding>,
}

impl Props<'_> {
    fn error(&mut self, key: &str, message: impl std::fmt::Display) {
        self.errors.push(Finding::error(
            (self.at)(key),
            format!("{}{message}", self.prefix),
        ));
    }

    /// A required finite number.
    fn num(&mut self, key: &str) -> Option<f64> {
        match self.obj.get(key) {
            Some(Value::Number(n)) => {
                let v = n.as_f64().filter(|v| v.is_finite());
                if v.is_none() {
                    self.error(key, "expected a finite number");
                }
                v
            }
            Some(other) => {
                self.error(key, format!("expected a number, found {other}"));
                None
            }
            None => {
                let m = missing(self.obj, key, self.known);
                self.error(key, m);
                None
            }
        }
    }

    /// An optional finite number (absent or `null`: `Some(None)`); `None` after an error.
    fn opt_num(&mut self, key: &str) -> Option<Option<f64>> {
        match self.obj.get(key) {
            None | Some(Value::Null) => Some(None),
            Some(_) => self.num(key).map(Some),
        }
    }

    /// A required non-empty text.
    fn text(&mut self, key: &str) -> Option<String> {
        match self.obj.get(key) {
            Some(Value::String(s)) if !s.trim().is_empty() => Some(s.clone()),
            Some(other) => {
                self.error(key, format!("expected a non-empty text, found {other}"));
                None
            }
            None => {
                let m = missing(self.obj, key, self.known);
                self.error(key, m);
                None
            }
        }
    }
}

/// Warnings for members of `obj` that ebbwise does not read but that look like a misspelling
/// of one it reads and that is absent (other members are free: GeoJSON properties often carry
/// names and styles from the tool that drew the zoning).
fn near_misses(
    obj: &Map<String, Value>,
    known: &[&str],
    at: &dyn Fn(&str) -> Position,
    prefix: &str,
    out: &mut Vec<Finding>,
) {
    for k in obj.keys().filter(|k| !known.contains(&k.as_str())) {
        if let Some(n) = crate::compute::names::nearest(k, known.iter().copied()) {
            if !obj.contains_key(n) {
                out.push(Finding::warning(
                    at(k),
                    format!("{prefix}unknown property '{k}', ignored: did you mean '{n}'?"),
                ));
            }
        }
    }
}

/// Reads a zoning file, stopping at its first problem (see [`read_zoning_all`] for every one).
pub fn read_zoning(path: &Path) -> Result<ZoningSpec, IoError> {
    let bytes = std::fs::read(path).map_err(|e| IoError::file(path, e))?;
    parse_zoning(&bytes, path)
}

/// Reads a zoning file and checks every feature: `Err` only when the file as a whole cannot be
/// read (not JSON, not a FeatureCollection); a feature's problems are in
/// [`ZoningSpec::errors`], and a feature with any is left out of [`ZoningSpec::zones`].
pub fn read_zoning_all(path: &Path) -> Result<ZoningSpec, IoError> {
    let bytes = std::fs::read(path).map_err(|e| IoError::file(path, e))?;
    parse_zoning_all(&bytes, path)
}

/// Parses zoning bytes as if read from `path`; the first problem is the error.
pub fn parse_zoning(bytes: &[u8], path: &Path) -> Result<ZoningSpec, IoError> {
    let z = parse_zoning_all(bytes, path)?;
    match z.errors.first() {
        Some(f) => Err(IoError::content(f.at.clone(), &f.message)),
        None => Ok(z),
    }
}

/// Parses zoning bytes as if read from `path`, checking every feature (see
/// [`read_zoning_all`]).
pub fn parse_zoning_all(bytes: &[u8], path: &Path) -> Result<ZoningSpec, IoError> {
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
    let mut errors = Vec::new();
    let mut left_out = Vec::new();
    let mut ids = std::collections::HashMap::new();
    for (i, f) in features.iter().enumerate() {
        let errors_before = errors.len();
        let pos = |k: &str| Position::file(path).field(format!("features[{i}].{k}"));
        let at = |k: &str| pos(&format!("properties.{k}"));
        let empty = Map::new();
        let props = match f.get("properties") {
            Some(Value::Object(m)) => Some(m),
            _ => {
                errors.push(Finding::error(
                    pos("properties"),
                    "expected an object of zone properties",
                ));
                None
            }
        };
        let id = props.and_then(|props| {
            Props {
                obj: props,
                known: &ZONE_PROPERTIES,
                at: &at,
                prefix: "",
                errors: &mut errors,
            }
            .text("zone")
        });
        if let Some(id) = &id {
            if let Some(prev) = ids.insert(id.clone(), i) {
                errors.push(Finding::error(
                    at("zone"),
                    format!("zone id '{id}' is used by features {prev} and {i}"),
                ));
            }
        }
        let prefix = id
            .as_ref()
            .map(|id| format!("zone '{id}': "))
            .unwrap_or_default();
        let props = props.unwrap_or(&empty);
        let properties = if f.get("properties").is_some_and(Value::is_object) {
            near_misses(props, &ZONE_PROPERTIES, &at, &prefix, &mut warnings);
            zone_properties(
                &mut Props {
                    obj: props,
                    known: &ZONE_PROPERTIES,
                    at: &at,
                    prefix: &prefix,
                    errors: &mut errors,
                },
                &mut warnings,
            )
        } else {
            None
        };
        let shape = match f.get("geometry") {
            None => {
                errors.push(Finding::error(
                    pos("geometry"),
                    format!("{prefix}the feature has no geometry"),
                ));
                None
            }
            Some(geom) => match geometry(geom) {
                Ok(g) => Some(g),
                Err(m) => {
                    errors.push(Finding::error(pos("geometry"), format!("{prefix}{m}")));
                    None
                }
            },
        };
        match (id, properties, shape) {
            (Some(id), Some(p), Some((polygon_lonlat, unclosed_rings)))
                if errors.len() == errors_before =>
            {
                zones.push(ZoneSpec {
                    id,
                    feature_index: i,
                    polygon_lonlat,
                    feeds: p.feeds,
                    mean_level_above_datum_m: p.mean_level_above_datum_m,
                    u_time_corrector_min: p.u_time_corrector_min,
                    u_range_ratio: p.u_range_ratio,
                    u_zone_m: p.u_zone_m,
                    u_datum_m: p.u_datum_m,
                    unclosed_rings,
                })
            }
            _ => left_out.push(i),
        }
    }
    if features.is_empty() {
        return Err(IoError::content(
            Position::file(path),
            "the zoning holds no zone",
        ));
    }
    Ok(ZoningSpec {
        zones,
        warnings,
        errors,
        left_out,
    })
}

/// A zone's properties other than its id.
struct ZoneProperties {
    feeds: Vec<FeedSpec>,
    mean_level_above_datum_m: Option<f64>,
    u_time_corrector_min: Option<f64>,
    u_range_ratio: Option<f64>,
    u_zone_m: Option<f64>,
    u_datum_m: Option<f64>,
}

/// Reads a zone's properties other than its id, every one of them: `None` when any has a
/// problem (each is in `p.errors`).
fn zone_properties(p: &mut Props, warnings: &mut Vec<Finding>) -> Option<ZoneProperties> {
    use crate::compute::uncertainty::{
        U_HEIGHT_REFUSED_ABOVE_M, U_RANGE_RATIO_REFUSED_ABOVE, U_TIME_CORRECTOR_REFUSED_ABOVE_MIN,
    };
    use crate::compute::zoning::{FEED_WEIGHT_MIN_EXCLUSIVE, ZONE_MEAN_LEVEL_REFUSED_ABOVE_M};
    let errors_before = p.errors.len();
    let feeds = match p.obj.get("feeds") {
        Some(Value::Array(list)) => {
            if p.obj.contains_key("gauge") {
                p.error(
                    "gauge",
                    "give either 'gauge' with its correctors or 'feeds', not both",
                );
            }
            if list.is_empty() {
                p.error("feeds", "expected at least one feed");
            }
            let mut out = Vec::new();
            for (k, item) in list.iter().enumerate() {
                let at = p.at;
                let fat = |key: &str| at(&format!("feeds[{k}].{key}"));
                let Value::Object(m) = item else {
                    p.error(
                        &format!("feeds[{k}]"),
                        "expected an object {gauge, weight, time_corrector_min, range_ratio}",
                    );
                    continue;
                };
                near_misses(m, &FEED_MEMBERS, &fat, p.prefix, warnings);
                let mut fp = Props {
                    obj: m,
                    known: &FEED_MEMBERS,
                    at: &fat,
                    prefix: p.prefix,
                    errors: &mut *p.errors,
                };
                let gauge = fp.text("gauge");
                let weight = fp.num("weight");
                let time_corrector_min = fp.num("time_corrector_min");
                let range_ratio = fp.num("range_ratio");
                if let Some(w) = weight {
                    if w <= FEED_WEIGHT_MIN_EXCLUSIVE {
                        fp.error(
                            "weight",
                            format!(
                                "a weight must be above 0, found {}{}",
                                short(w),
                                if w == 0.0 {
                                    " (a feed that adds nothing still needs the gauge's level: remove it)"
                                } else {
                                    ""
                                }
                            ),
                        );
                    }
                }
                if let Some(dt) = time_corrector_min {
                    plausible_time_corrector(dt, &mut fp, warnings);
                }
                if let Some(r) = range_ratio {
                    plausible_range_ratio(r, &mut fp);
                }
                if let (Some(gauge), Some(weight), Some(time_corrector_min), Some(range_ratio)) =
                    (gauge, weight, time_corrector_min, range_ratio)
                {
                    out.push(FeedSpec {
                        gauge,
                        weight,
                        time_corrector_min,
                        range_ratio,
                    });
                }
            }
            out
        }
        Some(_) => {
            p.error("feeds", "expected a list");
            Vec::new()
        }
        None => {
            let gauge = p.text("gauge");
            let time_corrector_min = p.num("time_corrector_min");
            let range_ratio = p.num("range_ratio");
            if let Some(dt) = time_corrector_min {
                plausible_time_corrector(dt, p, warnings);
            }
            if let Some(r) = range_ratio {
                plausible_range_ratio(r, p);
            }
            match (gauge, time_corrector_min, range_ratio) {
                (Some(gauge), Some(time_corrector_min), Some(range_ratio)) => vec![FeedSpec {
                    gauge,
                    weight: 1.0,
                    time_corrector_min,
                    range_ratio,
                }],
                _ => Vec::new(),
            }
        }
    };
    let mean_level_above_datum_m = p.opt_num("mean_level_above_datum_m");
    if let Some(Some(m)) = mean_level_above_datum_m {
        if m.abs() > ZONE_MEAN_LEVEL_REFUSED_ABOVE_M {
            p.error(
                "mean_level_above_datum_m",
                format!(
                    "zone mean level {} m is beyond the plausible ±{ZONE_MEAN_LEVEL_REFUSED_ABOVE_M} m from chart datum (centimetres or millimetres instead of metres?)",
                    short(m)
                ),
            );
        }
    }
    let mut opt_u = |k: &str, max: f64, unit: &str, hint: &str| -> Option<Option<f64>> {
        let v = p.opt_num(k)?;
        if let Some(v) = v {
            if v < 0.0 {
                p.error(
                    k,
                    format!(
                        "a standard uncertainty cannot be negative, found {}",
                        short(v)
                    ),
                );
            } else if v > max {
                p.error(
                    k,
                    format!(
                        "standard uncertainty {}{unit} is beyond the plausible {max}{unit} ({hint}?)",
                        short(v)
                    ),
                );
            }
        }
        Some(v)
    };
    let u_time_corrector_min = opt_u(
        "u_time_corrector_min",
        U_TIME_CORRECTOR_REFUSED_ABOVE_MIN,
        " min",
        "seconds instead of minutes",
    );
    let u_range_ratio = opt_u(
        "u_range_ratio",
        U_RANGE_RATIO_REFUSED_ABOVE,
        "",
        "a percentage instead of a ratio",
    );
    let u_zone_m = opt_u(
        "u_zone_m",
        U_HEIGHT_REFUSED_ABOVE_M,
        " m",
        "centimetres or millimetres instead of metres",
    );
    let u_datum_m = opt_u(
        "u_datum_m",
        U_HEIGHT_REFUSED_ABOVE_M,
        " m",
        "centimetres or millimetres instead of metres",
    );
    if let (Some(Some(_)), Some(None)) = (u_datum_m, mean_level_above_datum_m) {
        warnings.push(Finding::warning(
            (p.at)("u_datum_m"),
            format!(
                "{}not used: the zone has no mean_level_above_datum_m, so its tide is in the scaled form, where chart datum at the zone is the gauges' own carried by the range ratio and its uncertainty is the gauges' u_datum_m",
                p.prefix
            ),
        ));
    }
    if p.errors.len() > errors_before {
        return None;
    }
    Some(ZoneProperties {
        feeds,
        mean_level_above_datum_m: mean_level_above_datum_m.flatten(),
        u_time_corrector_min: u_time_corrector_min.flatten(),
        u_range_ratio: u_range_ratio.flatten(),
        u_zone_m: u_zone_m.flatten(),
        u_datum_m: u_datum_m.flatten(),
    })
}

/// Refuses a time corrector beyond [`TIME_CORRECTOR_REFUSED_ABOVE_MIN`] and warns on one
/// beyond [`TIME_CORRECTOR_WARNED_ABOVE_MIN`] (bounds of [`crate::compute::zoning`]).
///
/// [`TIME_CORRECTOR_REFUSED_ABOVE_MIN`]: crate::compute::zoning::TIME_CORRECTOR_REFUSED_ABOVE_MIN
/// [`TIME_CORRECTOR_WARNED_ABOVE_MIN`]: crate::compute::zoning::TIME_CORRECTOR_WARNED_ABOVE_MIN
fn plausible_time_corrector(dt: f64, p: &mut Props, warnings: &mut Vec<Finding>) {
    use crate::compute::zoning::{
        TIME_CORRECTOR_REFUSED_ABOVE_MIN, TIME_CORRECTOR_WARNED_ABOVE_MIN,
    };
    if dt.abs() > TIME_CORRECTOR_REFUSED_ABOVE_MIN {
        p.error(
            "time_corrector_min",
            format!(
                "time corrector {} min is beyond the plausible ±{TIME_CORRECTOR_REFUSED_ABOVE_MIN} min (hours or seconds instead of minutes?)",
                short(dt)
            ),
        );
    } else if dt.abs() > TIME_CORRECTOR_WARNED_ABOVE_MIN {
        warnings.push(Finding::warning(
            (p.at)("time_corrector_min"),
            format!(
                "{}time corrector {} min is larger than ±{TIME_CORRECTOR_WARNED_ABOVE_MIN} min: check it",
                p.prefix,
                short(dt)
            ),
        ));
    }
}

/// Refuses a range ratio outside [`crate::compute::zoning::RANGE_RATIO_BAND`].
fn plausible_range_ratio(r: f64, p: &mut Props) {
    let (lo, hi) = crate::compute::zoning::RANGE_RATIO_BAND;
    if !(lo..=hi).contains(&r) {
        p.error(
            "range_ratio",
            format!(
                "range ratio {} is outside the plausible band {lo} to {hi}",
                short(r)
            ),
        );
    }
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

    /// A zone's chart-datum uncertainty: read in the zone-mean form, warned as unused in the
    /// scaled form, refused above the height bound.
    #[test]
    fn zone_datum_uncertainty_is_read_warned_or_refused() {
        let both = ONE
            .replace(
                "\"range_ratio\":1.05}",
                "\"range_ratio\":1.05,\"u_datum_m\":0.05}",
            )
            .replace(
                "\"mean_level_above_datum_m\":2.1,",
                "\"mean_level_above_datum_m\":2.1,\"u_datum_m\":0.06,",
            );
        let z = parse(&both).unwrap();
        assert_eq!(z.zones[0].u_datum_m, Some(0.05));
        assert_eq!(z.zones[1].u_datum_m, Some(0.06));
        let w: Vec<String> = z.warnings.iter().map(|w| w.to_string()).collect();
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(
            w[0].contains("features[0].properties.u_datum_m")
                && w[0].contains("zone 'A': not used")
                && w[0].contains("scaled form"),
            "{}",
            w[0]
        );
        let e = parse(&both.replace("\"u_datum_m\":0.06", "\"u_datum_m\":6")).unwrap_err();
        assert!(
            e.to_string().contains("features[1].properties.u_datum_m")
                && e.to_string().contains("beyond the plausible 1 m"),
            "{e}"
        );
        assert_eq!(parse(ONE).unwrap().zones[1].u_datum_m, None);
    }

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

    /// Problems in several properties of several features are all reported, each at its
    /// feature and field; the features with problems are left out, the others kept.
    #[test]
    fn every_problem_of_every_feature_is_reported() {
        let text = ONE
            .replace(
                "\"range_ratio\":1.05",
                "\"range_ratio\":\"big\",\"u_zone_m\":-0.1",
            )
            .replace("\"weight\":0.3", "\"weight\":0")
            .replace("\"range_ratio\":0.9", "\"range_ratio\":0.9,\"gauge2\":1");
        let z = parse_zoning_all(text.as_bytes(), Path::new("z.geojson")).unwrap();
        let got: Vec<String> = z.errors.iter().map(|f| f.to_string()).collect();
        assert_eq!(
            got,
            vec![
                "error: z.geojson: field 'features[0].properties.range_ratio': zone 'A': expected a number, found \"big\"",
                "error: z.geojson: field 'features[0].properties.u_zone_m': zone 'A': a standard uncertainty cannot be negative, found -0.1",
                "error: z.geojson: field 'features[1].properties.feeds[1].weight': zone 'B': a weight must be above 0, found 0 (a feed that adds nothing still needs the gauge's level: remove it)",
            ]
        );
        assert_eq!(z.left_out, vec![0, 1]);
        assert!(z.zones.is_empty());
        // The strict reader's error is the first of them.
        assert_eq!(format!("error: {}", parse(&text).unwrap_err()), got[0]);
        // One feature fixed: it is kept, the other still left out.
        let text = text.replace(
            "\"range_ratio\":\"big\",\"u_zone_m\":-0.1",
            "\"range_ratio\":1.05",
        );
        let z = parse_zoning_all(text.as_bytes(), Path::new("z.geojson")).unwrap();
        assert_eq!((z.errors.len(), z.left_out.clone()), (1, vec![1]));
        assert_eq!(z.zones[0].id, "A");
    }

    /// Each bound of a zone's numbers accepts its limit and refuses just beyond it (limits of
    /// `compute::zoning` and `compute::uncertainty`, common practice).
    #[test]
    fn zone_bounds_are_inclusive() {
        for (props, refused) in [
            ("\"mean_level_above_datum_m\":-100", false),
            ("\"mean_level_above_datum_m\":-100.5", true),
            ("\"u_time_corrector_min\":60", false),
            ("\"u_time_corrector_min\":60.5", true),
            ("\"u_range_ratio\":0.5", false),
            ("\"u_range_ratio\":0.6", true),
            ("\"u_zone_m\":1", false),
            ("\"u_zone_m\":1.01", true),
        ] {
            let text = ONE.replace(
                "\"range_ratio\":1.05",
                &format!("\"range_ratio\":1.05,{props}"),
            );
            let z = parse_zoning_all(text.as_bytes(), Path::new("z.geojson")).unwrap();
            assert_eq!(!z.errors.is_empty(), refused, "{props}: {:?}", z.errors);
        }
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
