//! Which zone a point lies in.
//!
//! Owns: [`ZoneLocator`], a uniform grid over the zoning's extent backed by an R-tree of the zones'
//! bounding boxes. Grid cells that no zone edge passes through answer at once; the others ask the
//! R-tree for candidate zones and test each polygon exactly.
//!
//! **Rule for shared edges and overlaps**: a point on an edge shared by two zones, or inside two
//! overlapping zones, belongs to the zone that comes *first in the zoning file*. A point on the
//! outer boundary of the zoning belongs to the zone whose boundary it is on.
//!
//! Coordinates are in whatever plane the caller chose (the soundings' CRS); this module does no
//! projection.

use geo::coordinate_position::CoordPos;
use geo::{BoundingRect, Coord, CoordinatePosition, MultiPolygon, Rect};
use rstar::primitives::{GeomWithData, Rectangle};
use rstar::{RTree, AABB};

/// Grid resolution (cells per side) of the locator's fast path.
const GRID_CELLS_PER_SIDE: usize = 256;

#[derive(Debug, Clone)]
enum Cell {
    /// No zone edge crosses the cell: the cell's centre decides (zone index or none).
    Uniform(Option<u32>),
    /// At least one edge may cross the cell: test candidate polygons.
    Mixed,
}

/// Finds the zone containing a point, by the rule in the module docs.
#[derive(Debug, Clone)]
pub struct ZoneLocator {
    polygons: Vec<MultiPolygon<f64>>,
    tree: RTree<GeomWithData<Rectangle<[f64; 2]>, usize>>,
    extent: Option<Rect<f64>>,
    cell_w: f64,
    cell_h: f64,
    cells: Vec<Cell>,
}

impl ZoneLocator {
    /// Builds the locator from zone polygons in file order (index = zone index).
    pub fn new(polygons: Vec<MultiPolygon<f64>>) -> Self {
        let boxes: Vec<_> = polygons
            .iter()
            .enumerate()
            .filter_map(|(i, p)| {
                p.bounding_rect().map(|r| {
                    GeomWithData::new(
                        Rectangle::from_corners([r.min().x, r.min().y], [r.max().x, r.max().y]),
                        i,
                    )
                })
            })
            .collect();
        let extent = polygons
            .iter()
            .filter_map(|p| p.bounding_rect())
            .reduce(|a, b| {
                Rect::new(
                    Coord {
                        x: a.min().x.min(b.min().x),
                        y: a.min().y.min(b.min().y),
                    },
                    Coord {
                        x: a.max().x.max(b.max().x),
                        y: a.max().y.max(b.max().y),
                    },
                )
            });
        let mut loc = ZoneLocator {
            polygons,
            tree: RTree::bulk_load(boxes),
            extent,
            cell_w: 1.0,
            cell_h: 1.0,
            cells: Vec::new(),
        };
        loc.build_grid();
        loc
    }

    /// Number of zones.
    pub fn len(&self) -> usize {
        self.polygons.len()
    }

    /// True when there are no zones.
    pub fn is_empty(&self) -> bool {
        self.polygons.is_empty()
    }

    /// The zone polygons, in file order.
    pub fn polygons(&self) -> &[MultiPolygon<f64>] {
        &self.polygons
    }

    fn build_grid(&mut self) {
        let Some(ext) = self.extent else { return };
        let n = GRID_CELLS_PER_SIDE;
        self.cell_w = (ext.width() / n as f64).max(f64::MIN_POSITIVE);
        self.cell_h = (ext.height() / n as f64).max(f64::MIN_POSITIVE);
        let mut mixed = vec![false; n * n];
        // Mark every cell an edge may pass through: split each edge into pieces no longer than
        // half a cell and mark the cells touched by each piece's bounding box (conservative).
        for poly in &self.polygons {
            for p in &poly.0 {
                for ring in std::iter::once(p.exterior()).chain(p.interiors()) {
                    for seg in ring.lines() {
                        let dx = seg.end.x - seg.start.x;
                        let dy = seg.end.y - seg.start.y;
                        let steps = ((dx.abs() / (0.5 * self.cell_w))
                            .max(dy.abs() / (0.5 * self.cell_h))
                            .ceil() as usize)
                            .clamp(1, 1 << 20);
                        for k in 0..steps {
                            let a0 = k as f64 / steps as f64;
                            let a1 = (k + 1) as f64 / steps as f64;
                            let (x0, y0) = (seg.start.x + a0 * dx, seg.start.y + a0 * dy);
                            let (x1, y1) = (seg.start.x + a1 * dx, seg.start.y + a1 * dy);
                            let (i0, j0) = self.cell_of_clamped(x0.min(x1), y0.min(y1));
                            let (i1, j1) = self.cell_of_clamped(x0.max(x1), y0.max(y1));
                            // one cell of margin against rounding at cell borders
                            for j in j0.saturating_sub(1)..=(j1 + 1).min(n - 1) {
                                for i in i0.saturating_sub(1)..=(i1 + 1).min(n - 1) {
                                    mixed[j * n + i] = true;
                                }
                            }
                        }
                    }
                }
            }
        }
        let mut cells = Vec::with_capacity(n * n);
        for j in 0..n {
            for i in 0..n {
                if mixed[j * n + i] {
                    cells.push(Cell::Mixed);
                } else {
                    let c = Coord {
                        x: ext.min().x + (i as f64 + 0.5) * self.cell_w,
                        y: ext.min().y + (j as f64 + 0.5) * self.cell_h,
                    };
                    cells.push(Cell::Uniform(self.locate_exact(c).map(|z| z as u32)));
                }
            }
        }
        self.cells = cells;
    }

    fn cell_of_clamped(&self, x: f64, y: f64) -> (usize, usize) {
        let ext = self.extent.expect("grid built only with an extent");
        let n = GRID_CELLS_PER_SIDE as f64;
        let i = ((x - ext.min().x) / self.cell_w)
            .floor()
            .clamp(0.0, n - 1.0) as usize;
        let j = ((y - ext.min().y) / self.cell_h)
            .floor()
            .clamp(0.0, n - 1.0) as usize;
        (i, j)
    }

    /// Exact lookup through the R-tree, ignoring the grid.
    pub fn locate_exact(&self, c: Coord<f64>) -> Option<usize> {
        let env = AABB::from_point([c.x, c.y]);
        let mut best: Option<usize> = None;
        for cand in self.tree.locate_in_envelope_intersecting(&env) {
            let i = cand.data;
            if best.is_some_and(|b| b < i) {
                continue;
            }
            if self.polygons[i].coordinate_position(&c) != CoordPos::Outside {
                best = Some(i);
            }
        }
        best
    }

    /// The zone index holding point `(x, y)`, or `None` when it is outside every zone.
    pub fn locate(&self, x: f64, y: f64) -> Option<usize> {
        if !(x.is_finite() && y.is_finite()) {
            return None;
        }
        let ext = self.extent?;
        if x < ext.min().x || x > ext.max().x || y < ext.min().y || y > ext.max().y {
            return None;
        }
        let (i, j) = self.cell_of_clamped(x, y);
        match self.cells[j * GRID_CELLS_PER_SIDE + i] {
            Cell::Uniform(z) => z.map(|z| z as usize),
            Cell::Mixed => self.locate_exact(Coord { x, y }),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::polygon;

    fn square(x0: f64, y0: f64, x1: f64, y1: f64) -> MultiPolygon<f64> {
        MultiPolygon(vec![polygon![
            (x: x0, y: y0), (x: x1, y: y0), (x: x1, y: y1), (x: x0, y: y1), (x: x0, y: y0)
        ]])
    }

    #[test]
    fn shared_edge_belongs_to_the_first_zone_in_file_order() {
        let loc = ZoneLocator::new(vec![square(0.0, 0.0, 1.0, 1.0), square(1.0, 0.0, 2.0, 1.0)]);
        assert_eq!(loc.locate(0.5, 0.5), Some(0));
        assert_eq!(loc.locate(1.5, 0.5), Some(1));
        assert_eq!(
            loc.locate(1.0, 0.5),
            Some(0),
            "shared edge goes to the first zone"
        );
        let swapped =
            ZoneLocator::new(vec![square(1.0, 0.0, 2.0, 1.0), square(0.0, 0.0, 1.0, 1.0)]);
        assert_eq!(swapped.locate(1.0, 0.5), Some(0));
        assert_eq!(loc.locate(2.0, 0.5), Some(1), "outer boundary is inside");
        assert_eq!(loc.locate(2.0001, 0.5), None);
        assert_eq!(loc.locate(f64::NAN, 0.5), None);
    }

    #[test]
    fn grid_answers_agree_with_exact_lookup() {
        // An L-shaped zone beside a triangle, with a hole in the first.
        let l = MultiPolygon(vec![geo::Polygon::new(
            geo::LineString::from(vec![
                (0.0, 0.0),
                (3.0, 0.0),
                (3.0, 1.0),
                (1.0, 1.0),
                (1.0, 3.0),
                (0.0, 3.0),
                (0.0, 0.0),
            ]),
            vec![geo::LineString::from(vec![
                (0.2, 0.2),
                (0.6, 0.2),
                (0.6, 0.6),
                (0.2, 0.6),
                (0.2, 0.2),
            ])],
        )]);
        let tri = MultiPolygon(vec![
            polygon![(x: 1.0, y: 1.0), (x: 3.0, y: 1.0), (x: 1.0, y: 3.0), (x: 1.0, y: 1.0)],
        ]);
        let loc = ZoneLocator::new(vec![l, tri]);
        let mut n_checked = 0;
        for a in 0..300 {
            for b in 0..300 {
                let (x, y) = (-0.1 + a as f64 * 0.0107, -0.1 + b as f64 * 0.0107);
                assert_eq!(
                    loc.locate(x, y),
                    loc.locate_exact(Coord { x, y }),
                    "at ({x}, {y})"
                );
                n_checked += 1;
            }
        }
        assert_eq!(n_checked, 90_000);
        assert_eq!(loc.locate(0.4, 0.4), None, "inside the hole");
        assert_eq!(
            loc.locate(2.5, 2.5),
            None,
            "beyond the triangle's hypotenuse"
        );
        assert_eq!(loc.locate(1.5, 1.5), Some(1));
    }
}
