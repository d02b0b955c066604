//! Coordinate reference systems, through PROJ.
//!
//! The point-in-zone test runs in the **soundings' CRS**: the zoning (GeoJSON, WGS 84 lon/lat) is
//! transformed once into each soundings group's CRS, after its edges are densified so that they
//! stay where the GeoJSON put them (RFC 7946 edges are straight in longitude/latitude; a projected
//! straight edge between two far-apart vertices would not be). No sounding is transformed in the
//! hot loop.
//!
//! `proj::Proj` is neither `Send` nor `Sync`: a [`Transformer`] is made where it is used.

use geo::{Coord, Densify, Euclidean, LineString, MultiPolygon, Polygon};
use proj::Proj;

/// Longest edge left after densifying a zoning in longitude/latitude, degrees (≈ 55 m of
/// latitude).
pub const DENSIFY_MAX_DEG: f64 = 0.0005;

/// True when `crs` names WGS 84 geographic coordinates taken as (longitude, latitude).
pub fn is_wgs84_lonlat(crs: &str) -> bool {
    let c = crs.trim().to_ascii_uppercase();
    c == "EPSG:4326" || c == "OGC:CRS84" || c == "CRS:84"
}

/// Whether two CRS names (`AUTHORITY:CODE`) name the same CRS: equal ignoring case and
/// spaces, or both WGS 84 longitude and latitude.
pub fn same_crs_name(a: &str, b: &str) -> bool {
    let norm = |s: &str| s.trim().to_ascii_uppercase().replace(' ', "");
    norm(a) == norm(b) || (is_wgs84_lonlat(a) && is_wgs84_lonlat(b))
}

/// Why a CRS cannot be used or a point cannot be transformed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum CrsError {
    /// The CRS text is empty.
    #[error("no CRS given (expected e.g. EPSG:32629)")]
    Missing,
    /// PROJ does not know the CRS.
    #[error("unknown CRS '{crs}' (PROJ's database has no such code)")]
    Unknown {
        /// The CRS as given (trimmed).
        crs: String,
    },
    /// PROJ knows both CRSs but has no transformation between them.
    #[error("cannot transform {from} to {to}: {reason}")]
    NoTransformation {
        /// Source CRS.
        from: String,
        /// Target CRS.
        to: String,
        /// PROJ's words.
        reason: String,
    },
    /// PROJ failed on a point.
    #[error("cannot transform ({x}, {y}): {reason}")]
    Point {
        /// The point's x.
        x: f64,
        /// The point's y.
        y: f64,
        /// PROJ's words.
        reason: String,
    },
    /// The point has no finite image in the target CRS.
    #[error("({x}, {y}) has no image in {to}")]
    NoImage {
        /// The point's x.
        x: f64,
        /// The point's y.
        y: f64,
        /// Target CRS.
        to: String,
    },
}

/// A coordinate transformation between two CRSs, with (x = easting/longitude,
/// y = northing/latitude) axis order on both sides whatever the CRS definitions say.
pub struct Transformer {
    proj: Option<Proj>,
    /// Source CRS as given.
    pub from: String,
    /// Target CRS as given.
    pub to: String,
}

impl std::fmt::Debug for Transformer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "Transformer({} -> {})", self.from, self.to)
    }
}

impl Transformer {
    /// Builds a transformation; an unknown CRS is an error naming it.
    pub fn new(from: &str, to: &str) -> Result<Self, CrsError> {
        check_crs(from)?;
        check_crs(to)?;
        let identity = from.trim().eq_ignore_ascii_case(to.trim())
            || (is_wgs84_lonlat(from) && is_wgs84_lonlat(to));
        let proj = if identity {
            None
        } else {
            Some(
                Proj::new_known_crs(from, to, None).map_err(|e| CrsError::NoTransformation {
                    from: from.into(),
                    to: to.into(),
                    reason: e.to_string(),
                })?,
            )
        };
        Ok(Transformer {
            proj,
            from: from.to_string(),
            to: to.to_string(),
        })
    }

    /// Transforms one point.
    pub fn convert(&self, x: f64, y: f64) -> Result<(f64, f64), CrsError> {
        match &self.proj {
            None => Ok((x, y)),
            Some(p) => {
                let (ox, oy) = p.convert((x, y)).map_err(|e| CrsError::Point {
                    x,
                    y,
                    reason: e.to_string(),
                })?;
                if ox.is_finite() && oy.is_finite() {
                    Ok((ox, oy))
                } else {
                    Err(CrsError::NoImage {
                        x,
                        y,
                        to: self.to.clone(),
                    })
                }
            }
        }
    }

    /// Whether this is the identity.
    pub fn is_identity(&self) -> bool {
        self.proj.is_none()
    }

    /// Transforms a WGS 84 lon/lat zone polygon into the target CRS, densifying its edges first.
    pub fn polygon_from_lonlat(
        &self,
        mp: &MultiPolygon<f64>,
    ) -> Result<MultiPolygon<f64>, CrsError> {
        if self.is_identity() {
            return Ok(mp.clone());
        }
        let dense: MultiPolygon<f64> = mp.densify::<Euclidean>(DENSIFY_MAX_DEG);
        let ring = |ls: &LineString<f64>| -> Result<LineString<f64>, CrsError> {
            ls.0.iter()
                .map(|c| self.convert(c.x, c.y).map(|(x, y)| Coord { x, y }))
                .collect::<Result<Vec<_>, _>>()
                .map(LineString::new)
        };
        let polys = dense
            .0
            .iter()
            .map(|p| {
                Ok(Polygon::new(
                    ring(p.exterior())?,
                    p.interiors()
                        .iter()
                        .map(ring)
                        .collect::<Result<_, CrsError>>()?,
                ))
            })
            .collect::<Result<Vec<_>, CrsError>>()?;
        Ok(MultiPolygon(polys))
    }
}

/// A local azimuthal equidistant projection on WGS 84 centred at (`lon0`, `lat0`), metres:
/// distances from the centre are true, and over tens of kilometres the scale error elsewhere is
/// below 1e-5. For computations in metres over a survey area (co-tidal fields, zone edges).
pub fn local_metres_crs(lon0: f64, lat0: f64) -> String {
    format!("+proj=aeqd +lat_0={lat0:.6} +lon_0={lon0:.6} +datum=WGS84 +units=m +no_defs +type=crs")
}

/// Checks that PROJ knows a CRS; the message names it.
pub fn check_crs(crs: &str) -> Result<(), CrsError> {
    let t = crs.trim();
    if t.is_empty() {
        return Err(CrsError::Missing);
    }
    Proj::new(t)
        .map(|_| ())
        .map_err(|_| CrsError::Unknown { crs: t.into() })
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::polygon;

    #[test]
    fn unknown_epsg_is_named() {
        let e = Transformer::new("EPSG:4326", "EPSG:999999").unwrap_err();
        assert_eq!(
            e,
            CrsError::Unknown {
                crs: "EPSG:999999".into()
            }
        );
        assert_eq!(
            e.to_string(),
            "unknown CRS 'EPSG:999999' (PROJ's database has no such code)"
        );
        assert!(check_crs("EPSG:32629").is_ok());
    }

    #[test]
    fn lonlat_axis_order_is_kept() {
        // The central meridian of UTM zone 29 is 9° W: a point on it maps to easting 500 000 m
        // exactly (definition of the UTM false easting; common practice).
        let t = Transformer::new("EPSG:4326", "EPSG:32629").unwrap();
        let (e, n) = t.convert(-9.0, 45.0).unwrap();
        assert!((e - 500_000.0).abs() < 1e-6, "{e}");
        assert!(n > 4_900_000.0 && n < 5_100_000.0, "{n}");
    }

    #[test]
    fn densified_polygon_keeps_vertices() {
        let t = Transformer::new("EPSG:4326", "EPSG:32629").unwrap();
        let mp = MultiPolygon(vec![polygon![
            (x: -9.0, y: 45.0), (x: -8.99, y: 45.0), (x: -8.99, y: 45.01), (x: -9.0, y: 45.0)
        ]]);
        let out = t.polygon_from_lonlat(&mp).unwrap();
        let n = out.0[0].exterior().0.len();
        assert!(n > 20, "edges were densified ({n} vertices)");
        let first = out.0[0].exterior().0[0];
        assert!((first.x - 500_000.0).abs() < 1e-6);
    }
}
