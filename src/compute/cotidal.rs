//! Co-tidal and co-range fields: harmonic constants carried smoothly across the survey area from
//! several stations (gauges with constants, and "virtual gauges": constants at a point given by
//! the user, e.g. from an offshore tide model the authority supplies), and the time corrector
//! and range ratio they imply between any place and a chosen gauge.
//!
//! **Interpolation.** The stations, in projected metres, are triangulated (Delaunay, `spade`).
//! Inside the convex hull a place takes the barycentric weights of the triangle that holds it:
//! linear, exact at each station, continuous across edges. Each constituent is interpolated as
//! the complex number `H·e^{−iG}` (so that 350° and 10° average to 0°, never 180°: DOMAIN §4.3,
//! common practice), and Z0 linearly; the place's H and G are the modulus and the negated
//! argument of the weighted sum. Where the stations' phases differ much, the modulus falls below
//! the weighted mean of the amplitudes (two waves half a cycle apart cancel): that is the complex
//! interpolation's own behaviour, and the reason the weights should come from stations close
//! enough to see the same wave.
//!
//! **Outside the hull** a place takes the weights of the nearest point of the hull's boundary
//! (linear along that edge, constant across it): the field is carried outwards unchanged, never
//! extrapolated, and [`Weights::outside_by_m`] says how far the place lies beyond the hull so
//! that the caller can flag or refuse it.
//!
//! **Derived correctors** (DOMAIN §4.2): the time corrector `Δt = (G_place − G_gauge)/ω` of the
//! dominant constituent (M2 where the form factor `F = (K1 + O1)/(M2 + S2)` is below 1.5, K1
//! otherwise; Courtier's classification, common practice), the phase difference wrapped to
//! ±180°, and the range ratio `R` of the species' two main constituents summed (M2 + S2, or
//! K1 + O1: the spring range's ratio; the dominant constituent's ratio alone when the other is
//! missing).

use spade::{DelaunayTriangulation, HasPosition, Point2, PositionInTriangulation, Triangulation};

use super::astro::Constituent;
use super::harmonic::{form_factor, HarmonicConstants};

/// A station of the field: a gauge with constants, or a virtual gauge.
#[derive(Debug, Clone, PartialEq)]
pub struct Station {
    /// Its id (a gauge id, or the virtual gauge's name).
    pub id: String,
    /// Easting, projected metres.
    pub x_m: f64,
    /// Northing, projected metres.
    pub y_m: f64,
    /// Its harmonic constants (levels above chart datum).
    pub constants: HarmonicConstants,
    /// A virtual gauge (constants given at a point, no record).
    pub is_virtual: bool,
}

/// Why a field cannot be built.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FieldError {
    /// Fewer than three stations, or all on one line: no triangle to interpolate in.
    #[error("a field needs at least three stations not on one line; {stations} given{collinear}", collinear = if *.collinear { ", all on one line" } else { "" })]
    TooFewStations {
        /// Stations given.
        stations: usize,
        /// They lie on one line.
        collinear: bool,
    },
    /// Two stations at the same position.
    #[error("stations '{first}' and '{second}' stand at the same position")]
    SamePosition {
        /// The first station's id.
        first: String,
        /// The second station's id.
        second: String,
    },
    /// A position that is not a finite number.
    #[error("station '{id}' has a position that is not a finite number")]
    BadPosition {
        /// The station's id.
        id: String,
    },
    /// No constituent is held by every station.
    #[error("no constituent is held by every station")]
    NoCommonConstituent,
}

#[derive(Debug, Clone, Copy)]
struct Vertex {
    p: Point2<f64>,
    station: usize,
}

impl HasPosition for Vertex {
    type Scalar = f64;
    fn position(&self) -> Point2<f64> {
        self.p
    }
}

/// The stations' weights at a place.
#[derive(Debug, Clone, PartialEq)]
pub struct Weights {
    /// (station index, weight); weights are non-negative and sum to 1.
    pub w: Vec<(usize, f64)>,
    /// How far the place lies outside the stations' convex hull, metres (0 inside or on it).
    pub outside_by_m: f64,
}

/// The interpolated constants of a place: each constituent's complex value, and Z0.
#[derive(Debug, Clone)]
pub struct Field {
    stations: Vec<Station>,
    tri: DelaunayTriangulation<Vertex>,
    /// Constituents held by every station, in the first station's order.
    constituents: Vec<&'static Constituent>,
    /// Per station, per common constituent, `H·e^{−iG}` as (re, im).
    phasors: Vec<Vec<(f64, f64)>>,
    /// Constituents left out because some station lacks them.
    left_out: Vec<&'static str>,
    /// Hull edges as station index pairs.
    hull: Vec<(usize, usize)>,
}

fn phasor(h_m: f64, g_deg: f64) -> (f64, f64) {
    let g = g_deg.to_radians();
    (h_m * g.cos(), -h_m * g.sin())
}

fn from_phasor(z: (f64, f64)) -> (f64, f64) {
    let h = z.0.hypot(z.1);
    let g = (-z.1).atan2(z.0).to_degrees().rem_euclid(360.0);
    (h, g)
}

impl Field {
    /// Builds the field of `stations` over the constituents every one of them holds.
    pub fn new(stations: Vec<Station>) -> Result<Field, FieldError> {
        for s in &stations {
            if !(s.x_m.is_finite() && s.y_m.is_finite()) {
                return Err(FieldError::BadPosition { id: s.id.clone() });
            }
        }
        for (i, a) in stations.iter().enumerate() {
            if let Some(b) = stations[i + 1..]
                .iter()
                .find(|b| b.x_m == a.x_m && b.y_m == a.y_m)
            {
                return Err(FieldError::SamePosition {
                    first: a.id.clone(),
                    second: b.id.clone(),
                });
            }
        }
        let mut tri = DelaunayTriangulation::<Vertex>::new();
        for (i, s) in stations.iter().enumerate() {
            // Positions are finite (checked above), so insertion cannot fail.
            let _ = tri.insert(Vertex {
                p: Point2::new(s.x_m, s.y_m),
                station: i,
            });
        }
        if tri.num_inner_faces() == 0 {
            return Err(FieldError::TooFewStations {
                stations: stations.len(),
                collinear: stations.len() >= 3,
            });
        }
        let first = &stations[0].constants.constituents;
        let mut constituents = Vec::new();
        let mut left_out = Vec::new();
        for (c, _, _) in first {
            if stations[1..]
                .iter()
                .all(|s| s.constants.constituents.iter().any(|x| x.0.name == c.name))
            {
                constituents.push(*c);
            } else {
                left_out.push(c.name);
            }
        }
        for s in &stations[1..] {
            for (c, _, _) in &s.constants.constituents {
                if !constituents.iter().any(|x| x.name == c.name) && !left_out.contains(&c.name) {
                    left_out.push(c.name);
                }
            }
        }
        if constituents.is_empty() {
            return Err(FieldError::NoCommonConstituent);
        }
        let phasors = stations
            .iter()
            .map(|s| {
                constituents
                    .iter()
                    .map(|c| {
                        let (_, h, g) = s
                            .constants
                            .constituents
                            .iter()
                            .find(|x| x.0.name == c.name)
                            .expect("common constituent");
                        phasor(*h, *g)
                    })
                    .collect()
            })
            .collect();
        let hull = tri
            .convex_hull()
            .map(|e| (e.from().data().station, e.to().data().station))
            .collect();
        Ok(Field {
            stations,
            tri,
            constituents,
            phasors,
            left_out,
            hull,
        })
    }

    /// The stations.
    pub fn stations(&self) -> &[Station] {
        &self.stations
    }

    /// The constituents the field carries (held by every station).
    pub fn constituents(&self) -> &[&'static Constituent] {
        &self.constituents
    }

    /// Constituents some station lacks, left out of the field.
    pub fn left_out(&self) -> &[&'static str] {
        &self.left_out
    }

    /// The hull's edges, as pairs of station indices.
    pub fn hull_edges(&self) -> &[(usize, usize)] {
        &self.hull
    }

    /// The triangles, as triples of station indices.
    pub fn triangles(&self) -> Vec<[usize; 3]> {
        self.tri
            .inner_faces()
            .map(|f| f.vertices().map(|v| v.data().station))
            .collect()
    }

    /// The stations' weights at `(x_m, y_m)` (see the module's docs).
    pub fn weights(&self, x_m: f64, y_m: f64) -> Weights {
        let mut w = Vec::with_capacity(3);
        let outside_by_m = self.weights_into(x_m, y_m, &mut w);
        Weights { w, outside_by_m }
    }

    /// As [`Field::weights`], into `out` (cleared first; no allocation once it has room for
    /// three); returns how far the place lies outside the hull, metres.
    pub fn weights_into(&self, x_m: f64, y_m: f64, out: &mut Vec<(usize, f64)>) -> f64 {
        out.clear();
        let p = Point2::new(x_m, y_m);
        match self.tri.locate(p) {
            PositionInTriangulation::OnVertex(v) => {
                out.push((self.tri.vertex(v).data().station, 1.0));
                0.0
            }
            PositionInTriangulation::OnFace(f) => {
                let face = self.tri.face(f);
                let b = face.barycentric_interpolation(p);
                let v = face.vertices();
                out.extend((0..3).map(|i| (v[i].data().station, b[i].max(0.0))));
                0.0
            }
            PositionInTriangulation::OnEdge(e) => {
                let e = self.tri.directed_edge(e);
                let (a, b) = (e.from().data().station, e.to().data().station);
                let (wa, wb, _) = self.on_segment(a, b, x_m, y_m);
                out.extend([(a, wa), (b, wb)]);
                0.0
            }
            PositionInTriangulation::OutsideOfConvexHull(_)
            | PositionInTriangulation::NoTriangulation => {
                // The nearest hull edge, by squared distance.
                let mut best: Option<(f64, usize, usize, f64, f64)> = None;
                for &(a, b) in &self.hull {
                    let (wa, wb, d2) = self.on_segment(a, b, x_m, y_m);
                    if best.is_none_or(|x| d2 < x.0) {
                        best = Some((d2, a, b, wa, wb));
                    }
                }
                let (d2, a, b, wa, wb) = best.expect("a triangulation has a hull");
                out.extend([(a, wa), (b, wb)]);
                d2.sqrt()
            }
        }
    }

    /// As [`Field::weights_into`], trying first the triangle `last` (the one the previous
    /// place fell in: consecutive soundings mostly share it), and keeping in `last` the
    /// triangle this place falls in (`None` on an edge, a vertex or outside the hull). The
    /// weights are the same barycentric coordinates either way (to rounding).
    pub fn weights_near(
        &self,
        x_m: f64,
        y_m: f64,
        out: &mut Vec<(usize, f64)>,
        last: &mut Option<[usize; 3]>,
    ) -> f64 {
        if let Some(t) = *last {
            let p = |i: usize| (self.stations[t[i]].x_m, self.stations[t[i]].y_m);
            let (a, b, c) = (p(0), p(1), p(2));
            let det = (b.1 - c.1) * (a.0 - c.0) + (c.0 - b.0) * (a.1 - c.1);
            let l0 = ((b.1 - c.1) * (x_m - c.0) + (c.0 - b.0) * (y_m - c.1)) / det;
            let l1 = ((c.1 - a.1) * (x_m - c.0) + (a.0 - c.0) * (y_m - c.1)) / det;
            let l2 = 1.0 - l0 - l1;
            if l0 > 0.0 && l1 > 0.0 && l2 > 0.0 {
                out.clear();
                out.extend([(t[0], l0), (t[1], l1), (t[2], l2)]);
                return 0.0;
            }
        }
        let outside_by_m = self.weights_into(x_m, y_m, out);
        *last = match out[..] {
            [(a, _), (b, _), (c, _)] if outside_by_m == 0.0 => Some([a, b, c]),
            _ => None,
        };
        outside_by_m
    }

    /// The common constituents' names, space-separated (for messages).
    pub fn constituent_names(&self) -> String {
        self.constituents
            .iter()
            .map(|c| c.name)
            .collect::<Vec<_>>()
            .join(" ")
    }

    /// Station `i`'s phasor `H·e^{−iG}` of common constituent `k` as (re, im), metres.
    pub fn station_phasor(&self, i: usize, k: usize) -> (f64, f64) {
        self.phasors[i][k]
    }

    /// Weights of the nearest point of segment a–b, and the distance to it.
    /// The weights of `a` and `b` at the place's projection on their segment, and the squared
    /// distance to it, m² ([`segment_weights`]).
    fn on_segment(&self, a: usize, b: usize, x_m: f64, y_m: f64) -> (f64, f64, f64) {
        let (sa, sb) = (&self.stations[a], &self.stations[b]);
        segment_weights((sa.x_m, sa.y_m), (sb.x_m, sb.y_m), x_m, y_m)
    }

    /// The interpolated constants at `(x_m, y_m)`, with the weights used.
    pub fn constants_at(&self, x_m: f64, y_m: f64) -> (HarmonicConstants, Weights) {
        let w = self.weights(x_m, y_m);
        (self.constants_with(&w), w)
    }

    /// The constants the weights `w` give.
    pub fn constants_with(&self, w: &Weights) -> HarmonicConstants {
        let z0_m =
            w.w.iter()
                .map(|(i, wi)| wi * self.stations[*i].constants.z0_m)
                .sum();
        let constituents = self
            .constituents
            .iter()
            .enumerate()
            .map(|(k, c)| {
                let z = w.w.iter().fold((0.0, 0.0), |acc, (i, wi)| {
                    let p = self.phasors[*i][k];
                    (acc.0 + wi * p.0, acc.1 + wi * p.1)
                });
                let (h, g) = from_phasor(z);
                (*c, h, g)
            })
            .collect();
        HarmonicConstants { z0_m, constituents }
    }
}

/// Which constituent sets the time corrector.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dominant {
    /// M2 (form factor below 1.5, or unknown).
    M2,
    /// K1 (form factor 1.5 or more).
    K1,
}

impl Dominant {
    /// The constituent's name.
    pub fn name(self) -> &'static str {
        match self {
            Dominant::M2 => "M2",
            Dominant::K1 => "K1",
        }
    }

    /// The species partner whose amplitude joins the dominant's in the range ratio.
    pub fn partner(self) -> &'static str {
        match self {
            Dominant::M2 => "S2",
            Dominant::K1 => "O1",
        }
    }
}

/// The dominant constituent of `k` by its form factor (see the module's docs).
pub fn dominant(k: &HarmonicConstants) -> Dominant {
    let a = |n: &str| {
        k.constituents
            .iter()
            .find(|c| c.0.name == n)
            .map_or(0.0, |c| c.1)
    };
    match form_factor(a("K1"), a("O1"), a("M2"), a("S2")) {
        Some(f) if f >= 1.5 => Dominant::K1,
        _ => Dominant::M2,
    }
}

/// Time corrector and range ratio of a place relative to a gauge.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Derived {
    /// The constituent the time corrector comes from.
    pub dominant: Dominant,
    /// Time corrector, minutes (positive: the tide arrives later at the place).
    pub time_corrector_min: f64,
    /// Range ratio (place / gauge).
    pub range_ratio: f64,
    /// The place's mean level (Z0), metres above chart datum.
    pub mean_level_m: f64,
}

/// Why correctors cannot be derived.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum DeriveError {
    /// The dominant constituent is missing at the place or the gauge, or of zero amplitude.
    #[error("{name} is missing or of zero amplitude at the {at}")]
    Missing {
        /// The constituent.
        name: &'static str,
        /// `place` or `gauge`.
        at: &'static str,
    },
}

/// The time corrector and range ratio of `place` relative to `gauge`, the dominant constituent
/// chosen from the gauge's form factor (see the module's docs).
pub fn derive_correctors(
    place: &HarmonicConstants,
    gauge: &HarmonicConstants,
) -> Result<Derived, DeriveError> {
    let dom = dominant(gauge);
    let find = |k: &HarmonicConstants, n: &str| {
        k.constituents
            .iter()
            .find(|c| c.0.name == n)
            .map(|c| (c.0.speed_deg_per_h, c.1, c.2))
    };
    let (speed, hp, gp) =
        find(place, dom.name())
            .filter(|c| c.1 > 0.0)
            .ok_or(DeriveError::Missing {
                name: dom.name(),
                at: "place",
            })?;
    let (_, hg, gg) =
        find(gauge, dom.name())
            .filter(|c| c.1 > 0.0)
            .ok_or(DeriveError::Missing {
                name: dom.name(),
                at: "gauge",
            })?;
    let dg = (gp - gg + 540.0).rem_euclid(360.0) - 180.0;
    let range_ratio = match (find(place, dom.partner()), find(gauge, dom.partner())) {
        (Some(p), Some(g)) => (hp + p.1) / (hg + g.1),
        _ => hp / hg,
    };
    Ok(Derived {
        dominant: dom,
        time_corrector_min: dg / speed * 60.0,
        range_ratio,
        mean_level_m: place.z0_m,
    })
}

/// The weights of the ends `a`, `b` at the projection of `(x, y)` on their segment (clamped to
/// it; all on `a` when the two coincide), and the squared distance from the place to that
/// projection, m².
#[inline]
pub fn segment_weights(a: (f64, f64), b: (f64, f64), x: f64, y: f64) -> (f64, f64, f64) {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let len2 = dx * dx + dy * dy;
    let s = if len2 > 0.0 {
        (((x - a.0) * dx + (y - a.1) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let (ex, ey) = (x - (a.0 + s * dx), y - (a.1 + s * dy));
    (1.0 - s, s, ex * ex + ey * ey)
}

/// The total weight of station `i` in a list of (station, weight).
#[inline]
pub fn weight_of(w: &[(usize, f64)], i: usize) -> f64 {
    w.iter().filter(|(j, _)| *j == i).map(|(_, wi)| wi).sum()
}

/// The complex mean of several places' constants (each constituent's `H·e^{−iG}` averaged, Z0
/// averaged): a zone's constants from the field at points inside it. `None` for no places.
/// The constituents are those of the first that every place holds, matched by name.
pub fn mean_constants(ks: &[HarmonicConstants]) -> Option<HarmonicConstants> {
    let first = ks.first()?;
    let n = ks.len() as f64;
    let z0_m = ks.iter().map(|k| k.z0_m).sum::<f64>() / n;
    // Constituents matched by name; one that some set lacks is left out (its mean would be
    // taken over fewer sets than the others').
    let constituents = first
        .constituents
        .iter()
        .filter_map(|(c, _, _)| {
            let mut z = (0.0, 0.0);
            for k in ks {
                let (_, h, g) = k.constituents.iter().find(|(d, _, _)| d.name == c.name)?;
                let p = phasor(*h, *g);
                z = (z.0 + p.0 / n, z.1 + p.1 / n);
            }
            let (h, g) = from_phasor(z);
            Some((*c, h, g))
        })
        .collect();
    Some(HarmonicConstants { z0_m, constituents })
}

/// The largest difference, over a spring tide, between the tides two sets of correctors give
/// from one gauge, metres: the tide-varying part `A_s·|R₁e^{−iωΔt₁} − R₂e^{−iωΔt₂}|`, with
/// `A_s` the gauge's spring amplitude of the dominant species (the dominant constituent's
/// amplitude plus its partner's: at springs they add in phase, common practice) and ω the
/// dominant constituent's speed. It is the amplitude of the difference of two scaled and
/// shifted copies of one sinusoid (exact for a single constituent, first order for the species'
/// spring envelope). A mean-level difference adds to it at worst; it is not included.
pub fn spring_difference_m(
    gauge: &HarmonicConstants,
    dominant: Dominant,
    a: (f64, f64),
    b: (f64, f64),
) -> Option<f64> {
    let find = |n: &str| gauge.constituents.iter().find(|c| c.0.name == n);
    let dom = find(dominant.name())?;
    let amp = dom.1 + find(dominant.partner()).map_or(0.0, |c| c.1);
    let w = (dom.0.speed_deg_per_h / 60.0).to_radians(); // rad per minute
    let (pa, pb) = (-w * a.0, -w * b.0);
    let re = a.1 * pa.cos() - b.1 * pb.cos();
    let im = a.1 * pa.sin() - b.1 * pb.sin();
    Some(amp * re.hypot(im))
}

/// One zone's derived correctors relative to one of its feeding gauges.
#[derive(Debug, Clone, PartialEq)]
pub struct ZoneDerived {
    /// The zone.
    pub zone: String,
    /// The feeding gauge.
    pub gauge: String,
    /// Its weight in the zone.
    pub weight: f64,
    /// The zoning's time corrector and range ratio for this feed.
    pub zoning: (f64, f64),
    /// The zoning's zone-mean level, when it gives one.
    pub zoning_mean_level_m: Option<f64>,
    /// Derived from the zone's mean constants.
    pub derived: Derived,
    /// The range of the time corrector over the zone's points, minutes.
    pub time_corrector_range_min: (f64, f64),
    /// The range of the range ratio over the zone's points.
    pub range_ratio_range: (f64, f64),
    /// Largest spring difference between the zoning's correctors and the derived ones at any
    /// point of the zone, metres (`spring_difference_m`).
    pub worst_spring_difference_m: f64,
    /// Spring difference between the zoning's correctors and the zone's derived ones, metres.
    pub spring_difference_m: f64,
    /// How far the zone's farthest point lies outside the stations' hull, metres.
    pub outside_hull_max_m: f64,
    /// Points of the zone the field was evaluated at.
    pub points: usize,
}

/// Why a zone has no derived correctors for a feed.
#[derive(Debug, Clone, PartialEq)]
pub struct ZoneSkipped {
    /// The zone.
    pub zone: String,
    /// The gauge.
    pub gauge: String,
    /// Why.
    pub reason: String,
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::astro::constituent;

    fn station(id: &str, x: f64, y: f64, z0: f64, cons: &[(&str, f64, f64)]) -> Station {
        Station {
            id: id.into(),
            x_m: x,
            y_m: y,
            constants: HarmonicConstants {
                z0_m: z0,
                constituents: cons
                    .iter()
                    .map(|(n, h, g)| (constituent(n).unwrap(), *h, *g))
                    .collect(),
            },
            is_virtual: false,
        }
    }

    /// Five stations: a quadrilateral and one inside it, metres.
    const FIVE_PLACES: [(f64, f64); 5] = [
        (0.0, 0.0),
        (10_000.0, 0.0),
        (12_000.0, 9_000.0),
        (-1_000.0, 8_000.0),
        (5_000.0, 4_000.0),
    ];

    /// `weights_near` with its triangle hint gives the weights `weights_into` gives, walking a
    /// grid across and beyond five stations (so the hint is right, wrong and absent in turn).
    #[test]
    fn the_hinted_weights_are_the_searched_ones() {
        let pts = FIVE_PLACES;
        let stations = pts
            .iter()
            .enumerate()
            .map(|(i, (x, y))| station(&format!("s{i}"), *x, *y, 2.0, &[("M2", 1.0, 10.0)]))
            .collect();
        let f = Field::new(stations).unwrap();
        let (mut a, mut b, mut last) = (Vec::new(), Vec::new(), None);
        let mut hinted = 0;
        for k in 0..4000 {
            let (x, y) = (
                -3_000.0 + (k % 80) as f64 * 210.3,
                -2_000.0 + (k / 80) as f64 * 260.7,
            );
            let had = last;
            let da = f.weights_near(x, y, &mut a, &mut last);
            let db = f.weights_into(x, y, &mut b);
            assert!((da - db).abs() < 1e-9);
            if had.is_some() && last == had {
                hinted += 1;
            }
            for i in 0..5 {
                assert!(
                    (weight_of(&a, i) - weight_of(&b, i)).abs() < 1e-12,
                    "({x}, {y}): {a:?} vs {b:?}"
                );
            }
        }
        assert!(hinted > 1000, "{hinted}");
    }

    /// A complex field linear in x and y (each constituent's `H·e^{−iG}` and Z0), sampled at
    /// five stations, is reproduced exactly at any place inside the hull (barycentric
    /// interpolation is exact for linear functions: a fact of geometry).
    #[test]
    fn a_linear_field_is_reproduced_inside_the_hull() {
        // z(x, y) = z0 + zx·x + zy·y, per constituent; Z0 = 2 + 1e-5 x − 2e-5 y.
        let lin = [
            ("M2", (0.9, -0.6), (2.0e-5, 1.0e-5), (-1.5e-5, 2.5e-5)),
            ("K1", (0.1, 0.2), (-1.0e-6, 3.0e-6), (2.0e-6, 1.0e-6)),
        ];
        let at = |x: f64, y: f64| -> (f64, Vec<(&str, f64, f64)>) {
            let z0 = 2.0 + 1e-5 * x - 2e-5 * y;
            let cons = lin
                .iter()
                .map(|(n, z, zx, zy)| {
                    let (h, g) =
                        from_phasor((z.0 + zx.0 * x + zy.0 * y, z.1 + zx.1 * x + zy.1 * y));
                    (*n, h, g)
                })
                .collect();
            (z0, cons)
        };
        let pts = FIVE_PLACES;
        let stations = pts
            .iter()
            .enumerate()
            .map(|(i, (x, y))| {
                let (z0, c) = at(*x, *y);
                station(&format!("s{i}"), *x, *y, z0, &c)
            })
            .collect();
        let f = Field::new(stations).unwrap();
        for (x, y) in [
            (3_000.0, 1_000.0),
            (9_000.0, 5_000.0),
            (1_000.0, 6_000.0),
            (5_000.0, 4_000.0),
            (6_500.0, 2_000.0),
        ] {
            let (k, w) = f.constants_at(x, y);
            assert_eq!(w.outside_by_m, 0.0);
            let (z0, want) = at(x, y);
            assert!((k.z0_m - z0).abs() < 1e-12, "Z0 at {x},{y}");
            for (n, h, g) in want {
                let got = k.constituents.iter().find(|c| c.0.name == n).unwrap();
                assert!(
                    (got.1 - h).abs() < 1e-12,
                    "{n} H at {x},{y}: {} vs {h}",
                    got.1
                );
                let dg = (got.2 - g + 540.0).rem_euclid(360.0) - 180.0;
                assert!(dg.abs() < 1e-9, "{n} G at {x},{y}: {} vs {g}", got.2);
            }
        }
    }

    /// Phases of 350°, 10° and 0° of equal amplitude: the centroid's phase is near 0° (complex
    /// interpolation; the mean of the raw angles would be 120°).
    #[test]
    fn phases_interpolate_across_the_wrap() {
        let s = vec![
            station("a", 0.0, 0.0, 1.0, &[("M2", 1.0, 350.0)]),
            station("b", 1000.0, 0.0, 1.0, &[("M2", 1.0, 10.0)]),
            station("c", 0.0, 1000.0, 1.0, &[("M2", 1.0, 0.0)]),
        ];
        let f = Field::new(s).unwrap();
        let (k, _) = f.constants_at(1000.0 / 3.0, 1000.0 / 3.0);
        let g = k.constituents[0].2;
        let dg = (g + 180.0).rem_euclid(360.0) - 180.0;
        assert!(dg.abs() < 1e-9, "G {g}");
        // Midway between a and b: 0° exactly, amplitude cos 10°.
        let (k, _) = f.constants_at(500.0, 0.0);
        assert!(((k.constituents[0].2 + 180.0).rem_euclid(360.0) - 180.0).abs() < 1e-9);
        assert!((k.constituents[0].1 - 10f64.to_radians().cos()).abs() < 1e-12);
    }

    /// At a station the field returns that station's constants.
    #[test]
    fn at_a_station_the_field_is_the_station() {
        let s = vec![
            station(
                "a",
                0.0,
                0.0,
                1.1,
                &[("M2", 1.2, 100.0), ("S2", 0.4, 130.0)],
            ),
            station(
                "b",
                8000.0,
                500.0,
                1.3,
                &[("M2", 1.4, 115.0), ("S2", 0.45, 150.0)],
            ),
            station(
                "c",
                3000.0,
                7000.0,
                1.2,
                &[("M2", 1.3, 108.0), ("S2", 0.42, 141.0)],
            ),
        ];
        let f = Field::new(s.clone()).unwrap();
        for st in &s {
            let (k, w) = f.constants_at(st.x_m, st.y_m);
            assert_eq!(w.w.len(), 1);
            assert!((k.z0_m - st.constants.z0_m).abs() < 1e-12);
            for ((_, h, g), (_, h0, g0)) in k.constituents.iter().zip(&st.constants.constituents) {
                assert!((h - h0).abs() < 1e-12 && (g - g0).abs() < 1e-9);
            }
        }
    }

    /// Outside the hull a place takes the nearest hull point's constants, and says how far out
    /// it lies.
    #[test]
    fn outside_the_hull_the_nearest_edge_holds() {
        let s = vec![
            station("a", 0.0, 0.0, 1.0, &[("M2", 1.0, 100.0)]),
            station("b", 1000.0, 0.0, 2.0, &[("M2", 1.0, 100.0)]),
            station("c", 0.0, 1000.0, 3.0, &[("M2", 1.0, 100.0)]),
        ];
        let f = Field::new(s).unwrap();
        let (k, w) = f.constants_at(250.0, -400.0);
        assert!((w.outside_by_m - 400.0).abs() < 1e-9);
        assert!((k.z0_m - 1.25).abs() < 1e-12, "{}", k.z0_m);
        // Beyond a corner: the corner itself.
        let (k, w) = f.constants_at(1300.0, -400.0);
        assert!((w.outside_by_m - 500.0).abs() < 1e-9);
        assert!((k.z0_m - 2.0).abs() < 1e-12);
    }

    /// Two stations, or three on a line, are refused; so are two at one position.
    #[test]
    fn degenerate_station_sets_are_refused() {
        let m2 = [("M2", 1.0, 100.0)];
        let two = vec![
            station("a", 0.0, 0.0, 1.0, &m2),
            station("b", 1.0, 0.0, 1.0, &m2),
        ];
        assert!(matches!(
            Field::new(two),
            Err(FieldError::TooFewStations { stations: 2, .. })
        ));
        let line = vec![
            station("a", 0.0, 0.0, 1.0, &m2),
            station("b", 1.0, 1.0, 1.0, &m2),
            station("c", 2.0, 2.0, 1.0, &m2),
        ];
        assert!(matches!(
            Field::new(line),
            Err(FieldError::TooFewStations {
                collinear: true,
                ..
            })
        ));
        let same = vec![
            station("a", 0.0, 0.0, 1.0, &m2),
            station("b", 0.0, 0.0, 1.0, &m2),
            station("c", 2.0, 1.0, 1.0, &m2),
        ];
        assert!(matches!(
            Field::new(same),
            Err(FieldError::SamePosition { .. })
        ));
    }

    /// The spring difference of equal correctors is 0; of range ratios 1.0 and 1.1 with no time
    /// difference, 0.1·A_s; of a pure time difference Δt, 2·A_s·sin(ωΔt/2) (the chord of two
    /// unit phasors: a fact of trigonometry).
    #[test]
    fn spring_difference_of_two_corrector_sets() {
        let g = HarmonicConstants {
            z0_m: 2.0,
            constituents: vec![
                (constituent("M2").unwrap(), 1.0, 0.0),
                (constituent("S2").unwrap(), 0.4, 0.0),
            ],
        };
        let d = |a, b| spring_difference_m(&g, Dominant::M2, a, b).unwrap();
        assert!(d((10.0, 1.0), (10.0, 1.0)).abs() < 1e-12);
        assert!((d((0.0, 1.0), (0.0, 1.1)) - 0.14).abs() < 1e-12);
        let w = (28.984_104_2f64 / 60.0).to_radians();
        let want = 2.0 * 1.4 * (w * 20.0 / 2.0).sin();
        assert!((d((0.0, 1.0), (20.0, 1.0)) - want).abs() < 1e-12);
        assert!(spring_difference_m(&g, Dominant::K1, (0.0, 1.0), (0.0, 1.0)).is_none());
    }

    /// The complex mean of two places half a cycle apart cancels; of equal phases keeps them.
    #[test]
    fn mean_constants_average_phasors() {
        let k = |h: f64, g: f64| HarmonicConstants {
            z0_m: h,
            constituents: vec![(constituent("M2").unwrap(), h, g)],
        };
        let m = mean_constants(&[k(1.0, 90.0), k(1.0, 270.0)]).unwrap();
        assert!(m.constituents[0].1 < 1e-12);
        let m = mean_constants(&[k(1.0, 350.0), k(2.0, 10.0)]).unwrap();
        assert!((m.z0_m - 1.5).abs() < 1e-12);
        let dg = (m.constituents[0].2 + 180.0).rem_euclid(360.0) - 180.0;
        assert!(dg > 0.0 && dg < 10.0, "{dg}");
        assert!(mean_constants(&[]).is_none());
    }

    /// A place whose M2 lags the gauge's by 30° has a time corrector of 30°/ω_M2 = 62.09 min,
    /// and the range ratio of M2 + S2 (DOMAIN §4.2); a diurnal place takes K1.
    #[test]
    fn derived_correctors_follow_the_dominant_constituent() {
        let mk = |z0: f64, c: &[(&str, f64, f64)]| HarmonicConstants {
            z0_m: z0,
            constituents: c
                .iter()
                .map(|(n, h, g)| (constituent(n).unwrap(), *h, *g))
                .collect(),
        };
        let gauge = mk(
            2.0,
            &[
                ("M2", 1.0, 350.0),
                ("S2", 0.4, 20.0),
                ("K1", 0.1, 50.0),
                ("O1", 0.08, 40.0),
            ],
        );
        let place = mk(
            2.2,
            &[
                ("M2", 1.1, 20.0),
                ("S2", 0.43, 52.0),
                ("K1", 0.1, 55.0),
                ("O1", 0.08, 44.0),
            ],
        );
        let d = derive_correctors(&place, &gauge).unwrap();
        assert_eq!(d.dominant, Dominant::M2);
        assert!(
            (d.time_corrector_min - 30.0 / 28.984_104_2 * 60.0).abs() < 1e-6,
            "{d:?}"
        );
        assert!((d.range_ratio - 1.53 / 1.4).abs() < 1e-12);
        assert_eq!(d.mean_level_m, 2.2);
        let gauge = mk(
            1.0,
            &[
                ("M2", 0.1, 0.0),
                ("S2", 0.05, 0.0),
                ("K1", 0.5, 300.0),
                ("O1", 0.4, 280.0),
            ],
        );
        let place = mk(
            1.0,
            &[
                ("M2", 0.1, 0.0),
                ("S2", 0.05, 0.0),
                ("K1", 0.6, 290.0),
                ("O1", 0.5, 271.0),
            ],
        );
        let d = derive_correctors(&place, &gauge).unwrap();
        assert_eq!(d.dominant, Dominant::K1);
        assert!((d.time_corrector_min + 10.0 / 15.041_068_6 * 60.0).abs() < 1e-6);
        assert!((d.range_ratio - 1.1 / 0.9).abs() < 1e-12);
    }
}
