//! The co-tidal map as plain data: one constituent's co-tidal and co-range lines in local
//! metres, split at the stations' hull, with the zones, stations, triangulation and
//! zone-boundary steps the map draws (built by `run::cotidal_map`, written by
//! `io::cotidal_map`).

use super::boundary::BoundaryStep;
use super::isolines::LineKind;

/// One line value's parts inside and outside the stations' hull, local metres.
#[derive(Debug, Clone, PartialEq)]
pub struct MapLine {
    /// Phase or amplitude.
    pub kind: LineKind,
    /// True phase (degrees, [0, 360)) or amplitude (metres).
    pub value: f64,
    /// Parts inside the hull.
    pub inside: Vec<Vec<(f64, f64)>>,
    /// Parts outside it (the field carried out from the hull's edge).
    pub outside: Vec<Vec<(f64, f64)>>,
}

/// A station as drawn.
#[derive(Debug, Clone, PartialEq)]
pub struct MapStation {
    /// Its id.
    pub id: String,
    /// Local metres.
    pub x_m: f64,
    /// Local metres.
    pub y_m: f64,
    /// A virtual gauge (constants at a point, no record).
    pub is_virtual: bool,
}

/// A zone-boundary step as drawn: the step, and its shared edge in local metres.
#[derive(Debug, Clone, PartialEq)]
pub struct MapStep {
    /// The step (its edge also in longitude/latitude).
    pub step: BoundaryStep,
    /// The shared edge, local metres.
    pub edge_m: Vec<Vec<(f64, f64)>>,
}

/// Everything the co-tidal map holds.
#[derive(Debug, Clone)]
pub struct CotidalMap {
    /// The constituent drawn.
    pub constituent: String,
    /// Whether the constituent was chosen by the form factor (not named by the user).
    pub constituent_by_form_factor: bool,
    /// Co-tidal lines every this many degrees.
    pub phase_step_deg: f64,
    /// Co-range lines every this many metres.
    pub amplitude_step_m: f64,
    /// The grid step, metres.
    pub cell_m: f64,
    /// Lines, local metres.
    pub lines: Vec<MapLine>,
    /// Zones (id, outline in local metres).
    pub zones: Vec<(String, geo::MultiPolygon<f64>)>,
    /// Stations.
    pub stations: Vec<MapStation>,
    /// Triangles of the field, local metres.
    pub triangles: Vec<[(f64, f64); 3]>,
    /// The hull's outline, local metres, closed.
    pub hull: Vec<(f64, f64)>,
    /// The zone-boundary steps, or why there are none on the map.
    pub steps: StepsOnMap,
    /// The span the steps are computed over, UTC seconds.
    pub steps_span_s: Option<(f64, f64)>,
}

/// The zone-boundary steps of a map, or why it has none.
#[derive(Debug, Clone, PartialEq)]
pub enum StepsOnMap {
    /// The steps of every shared edge (none when no two zones share an edge).
    Drawn(Vec<MapStep>),
    /// Not drawn, and why (the gauge records could not be loaded, or have no common span).
    NotDrawn {
        /// Why.
        reason: String,
    },
}
