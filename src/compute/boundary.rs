//! Zone-boundary steps: where two zones of a discrete zoning share an edge, the tide each gives
//! at the same instant differs, and a sounding on one side is reduced with one tide and its
//! neighbour across the edge with the other. The difference is a step in the reduced seabed
//! along the edge (of the same size: reduced depth = observed depth − tide).
//!
//! **Adjacency.** Two zones are adjacent when their outlines run together: points spaced
//! [`EDGE_SAMPLE_M`] along one zone's outline lying within [`EDGE_TOLERANCE_M`] of the other's
//! outline (a zoning drawn with snapped vertices shares them exactly; the tolerance allows for
//! digitising); the shared length is the number of such points times the spacing, and pairs
//! sharing less than [`MIN_SHARED_M`] (a corner) are left out. Outlines in projected metres.
//!
//! **Step statistics** over the zones' tide series on a common time grid: the largest step (its
//! sign: the second zone's tide minus the first's), its instant, and the RMS step, over the
//! instants at which both zones have a tide.

use geo::{Densify, Distance, Euclidean, MultiPolygon};

/// Spacing of the points sampled along a zone's outline, metres.
pub const EDGE_SAMPLE_M: f64 = 10.0;

/// A point of one outline lies on the other when within this distance, metres.
pub const EDGE_TOLERANCE_M: f64 = 2.0;

/// Pairs sharing less than this length are not adjacent (a shared corner), metres.
pub const MIN_SHARED_M: f64 = 30.0;

/// Adjacent pairs `(a, b, shared length m)`, `a < b`, of zones given as outlines in projected
/// metres.
pub fn adjacent_pairs(outlines: &[MultiPolygon<f64>]) -> Vec<(usize, usize, f64)> {
    let samples: Vec<Vec<geo::Point<f64>>> = outlines
        .iter()
        .map(|mp| {
            mp.densify::<Euclidean>(EDGE_SAMPLE_M)
                .0
                .iter()
                .flat_map(|p| {
                    std::iter::once(p.exterior())
                        .chain(p.interiors())
                        .flat_map(|ls| {
                            // The closing point repeats the first.
                            let n = ls.0.len().saturating_sub(1);
                            ls.0[..n]
                                .iter()
                                .map(|c| geo::Point::from(*c))
                                .collect::<Vec<_>>()
                        })
                        .collect::<Vec<_>>()
                })
                .collect()
        })
        .collect();
    let rings: Vec<Vec<geo::LineString<f64>>> = outlines
        .iter()
        .map(|mp| {
            mp.0.iter()
                .flat_map(|p| {
                    std::iter::once(p.exterior().clone()).chain(p.interiors().iter().cloned())
                })
                .collect()
        })
        .collect();
    let boxes: Vec<Option<geo::Rect<f64>>> = outlines
        .iter()
        .map(geo::BoundingRect::bounding_rect)
        .collect();
    let near = |a: &geo::Rect<f64>, b: &geo::Rect<f64>| {
        a.min().x <= b.max().x + EDGE_TOLERANCE_M
            && b.min().x <= a.max().x + EDGE_TOLERANCE_M
            && a.min().y <= b.max().y + EDGE_TOLERANCE_M
            && b.min().y <= a.max().y + EDGE_TOLERANCE_M
    };
    let mut out = Vec::new();
    for a in 0..outlines.len() {
        for b in a + 1..outlines.len() {
            let (Some(ba), Some(bb)) = (boxes[a], boxes[b]) else {
                continue;
            };
            if !near(&ba, &bb) {
                continue;
            }
            let on = samples[a]
                .iter()
                .filter(|p| {
                    rings[b]
                        .iter()
                        .any(|ls| Euclidean::distance(*p, ls) <= EDGE_TOLERANCE_M)
                })
                .count();
            let shared = on as f64 * EDGE_SAMPLE_M;
            if shared >= MIN_SHARED_M {
                out.push((a, b, shared));
            }
        }
    }
    out
}

/// The shared edge of zones `a` and `b` as polylines in projected metres: the runs of points
/// sampled every [`EDGE_SAMPLE_M`] along `a`'s outline that lie within [`EDGE_TOLERANCE_M`] of
/// `b`'s, simplified to within 0.5 m (Ramer–Douglas–Peucker). Runs of a single point (a shared
/// corner) are left out.
pub fn shared_edge(a: &MultiPolygon<f64>, b: &MultiPolygon<f64>) -> Vec<Vec<(f64, f64)>> {
    use geo::Simplify;
    let rings_b: Vec<geo::LineString<f64>> = b
        .0
        .iter()
        .flat_map(|p| std::iter::once(p.exterior().clone()).chain(p.interiors().iter().cloned()))
        .collect();
    let on_b = |c: &geo::Coord<f64>| {
        let p = geo::Point::from(*c);
        rings_b
            .iter()
            .any(|ls| Euclidean::distance(&p, ls) <= EDGE_TOLERANCE_M)
    };
    let mut out = Vec::new();
    for poly in &a.densify::<Euclidean>(EDGE_SAMPLE_M).0 {
        for ring in std::iter::once(poly.exterior()).chain(poly.interiors()) {
            let pts = &ring.0;
            // The closing point repeats the first.
            let n = pts.len().saturating_sub(1);
            if n == 0 {
                continue;
            }
            let on: Vec<bool> = pts[..n].iter().map(on_b).collect();
            let mut runs: Vec<Vec<geo::Coord<f64>>> = Vec::new();
            match on.iter().position(|x| !x) {
                None => runs.push(pts.to_vec()),
                Some(start) => {
                    let mut cur = Vec::new();
                    for k in 1..=n {
                        let i = (start + k) % n;
                        if on[i] {
                            cur.push(pts[i]);
                        } else if !cur.is_empty() {
                            runs.push(std::mem::take(&mut cur));
                        }
                    }
                    if !cur.is_empty() {
                        runs.push(cur);
                    }
                }
            }
            for r in runs.into_iter().filter(|r| r.len() >= 2) {
                let ls = geo::LineString(r).simplify(&0.5);
                out.push(ls.0.iter().map(|c| (c.x, c.y)).collect());
            }
        }
    }
    out
}

/// The tide step across one shared edge over the survey period.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BoundaryStep {
    /// The first zone's id.
    pub zone_a: String,
    /// The second zone's id.
    pub zone_b: String,
    /// Length of the shared edge, metres.
    pub shared_m: f64,
    /// The largest step, the second zone's tide minus the first's, metres (signed).
    pub max_step_m: f64,
    /// When it occurs, UTC seconds.
    #[serde(skip)]
    pub max_at_s: f64,
    /// When it occurs, ISO 8601 UTC (written by the I/O layer's clock labels; empty until set).
    pub max_at_utc: String,
    /// RMS step over the instants with both tides, metres.
    pub rms_step_m: f64,
    /// Instants at which both zones have a tide.
    pub instants: usize,
    /// The step the edge puts into the reduced soundings at the largest tide step, metres: a
    /// seabed point on the edge reduced from the second zone reads this much deeper than from
    /// the first (reduced depth = observed depth − tide, so depth_b − depth_a = −step; negative:
    /// shallower).
    pub max_depth_step_m: f64,
    /// The shared edge as WGS 84 [longitude, latitude] polylines (set by the caller that knows
    /// the projection; empty until set).
    pub edge_lonlat: Vec<Vec<[f64; 2]>>,
}

/// The steps of each adjacent pair, from the zones' tides on a common grid `times_s`
/// (`tides[zone][k]`, `None` where a zone has no tide); largest |step| first. Pairs without an
/// instant at which both have a tide are left out.
pub fn boundary_steps(
    ids: &[String],
    times_s: &[f64],
    tides: &[Vec<Option<f64>>],
    pairs: &[(usize, usize, f64)],
) -> Vec<BoundaryStep> {
    let mut out: Vec<BoundaryStep> = pairs
        .iter()
        .filter_map(|&(a, b, shared_m)| {
            let mut max: Option<(f64, f64)> = None;
            let (mut ss, mut n) = (0.0, 0usize);
            for (k, t) in times_s.iter().enumerate() {
                if let (Some(Some(x)), Some(Some(y))) = (tides[a].get(k), tides[b].get(k)) {
                    let d = y - x;
                    ss += d * d;
                    n += 1;
                    if max.is_none_or(|m| d.abs() > m.0.abs()) {
                        max = Some((d, *t));
                    }
                }
            }
            let (max_step_m, max_at_s) = max?;
            Some(BoundaryStep {
                zone_a: ids[a].clone(),
                zone_b: ids[b].clone(),
                shared_m,
                max_step_m,
                max_at_s,
                max_at_utc: String::new(),
                rms_step_m: (ss / n as f64).sqrt(),
                instants: n,
                max_depth_step_m: -max_step_m,
                edge_lonlat: Vec::new(),
            })
        })
        .collect();
    out.sort_by(|x, y| y.max_step_m.abs().total_cmp(&x.max_step_m.abs()));
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::{polygon, MultiPolygon};

    fn square(x0: f64, y0: f64, d: f64) -> MultiPolygon<f64> {
        MultiPolygon(vec![polygon![
            (x: x0, y: y0),
            (x: x0 + d, y: y0),
            (x: x0 + d, y: y0 + d),
            (x: x0, y: y0 + d),
            (x: x0, y: y0),
        ]])
    }

    /// Three 1 km squares in a row and one touching the last at a corner only: the two shared
    /// edges are found with their length (within one sample spacing), the corner is not.
    #[test]
    fn adjacency_from_shared_edges() {
        let z = vec![
            square(0.0, 0.0, 1000.0),
            square(1000.0, 0.0, 1000.0),
            square(2000.0, 0.0, 1000.0),
            square(3000.0, 1000.0, 1000.0),
        ];
        let p = adjacent_pairs(&z);
        let pairs: Vec<(usize, usize)> = p.iter().map(|x| (x.0, x.1)).collect();
        assert_eq!(pairs, vec![(0, 1), (1, 2)], "{p:?}");
        for (_, _, s) in &p {
            assert!((s - 1000.0).abs() <= EDGE_SAMPLE_M + 1e-9, "{s}");
        }
        // The shared edge of the first two is their common side x = 1000, y 0..1000 (geometry).
        let e = shared_edge(&z[0], &z[1]);
        assert_eq!(e.len(), 1, "{e:?}");
        for (x, _) in &e[0] {
            assert!((x - 1000.0).abs() < 1e-9, "{e:?}");
        }
        let ys: Vec<f64> = e[0].iter().map(|p| p.1).collect();
        let lo = ys.iter().cloned().fold(f64::INFINITY, f64::min);
        let hi = ys.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
        assert!(lo < 1e-9 && hi > 1000.0 - 1e-9, "{lo}..{hi}");
        assert!(shared_edge(&z[2], &z[3]).is_empty());
        // A sliver 1.5 m away still counts (digitising); 5 m away does not.
        let z = vec![
            square(0.0, 0.0, 1000.0),
            square(1001.5, 0.0, 1000.0),
            square(-1005.0, 0.0, 1000.0),
        ];
        let pairs: Vec<(usize, usize)> = adjacent_pairs(&z).iter().map(|x| (x.0, x.1)).collect();
        assert_eq!(pairs, vec![(0, 1)]);
    }

    /// A planted mismatch: zone B's tide is zone A's × 1.1 (a range-ratio error) on a sine of
    /// amplitude 1 m; the step peaks at 0.1 m at the sine's crest and its RMS is 0.1/√2
    /// (analytic, over whole periods); the unrelated pair with equal tides has no step.
    #[test]
    fn steps_of_a_planted_mismatch() {
        let n = 1440;
        let times: Vec<f64> = (0..n).map(|k| k as f64 * 60.0).collect();
        let a: Vec<Option<f64>> = times
            .iter()
            .map(|t| Some((std::f64::consts::TAU * t / 43_200.0).sin()))
            .collect();
        let b: Vec<Option<f64>> = a.iter().map(|x| x.map(|v| 1.1 * v)).collect();
        let mut c = a.clone();
        c[5] = None;
        let ids = vec!["A".to_string(), "B".to_string(), "C".to_string()];
        let s = boundary_steps(&ids, &times, &[a, b, c], &[(0, 1, 500.0), (0, 2, 300.0)]);
        assert_eq!(s.len(), 2);
        assert_eq!((s[0].zone_a.as_str(), s[0].zone_b.as_str()), ("A", "B"));
        assert!((s[0].max_step_m.abs() - 0.1).abs() < 1e-9, "{:?}", s[0]);
        // depth_b − depth_a = −(tide_b − tide_a) (reduced depth = observed depth − tide).
        assert_eq!(s[0].max_depth_step_m, -s[0].max_step_m);
        assert!(
            (s[0].rms_step_m - 0.1 / 2f64.sqrt()).abs() < 1e-6,
            "{:?}",
            s[0]
        );
        let crest = (s[0].max_at_s % 43_200.0 - 10_800.0)
            .abs()
            .min((s[0].max_at_s % 43_200.0 - 32_400.0).abs());
        assert!(crest < 1.0, "{}", s[0].max_at_s);
        assert_eq!(s[1].max_step_m, 0.0);
        assert_eq!(s[1].instants, n - 1);
    }
}
