//! Continuous tide between gauges: two [`TideModel`]s that carry the tide smoothly across the
//! survey area from a co-tidal [`Field`] (gauges with harmonic constants and virtual gauges),
//! instead of stepping it at zone edges.
//!
//! **Weights.** A place takes two sets of weights: `w_i` over the field's stations (every
//! station, virtual ones too: [`Field::weights_into`]) and `β_g` over the gauges with records
//! (the Delaunay triangulation of those alone, the same rule outside its hull; one gauge takes
//! weight 1, two the projection on their segment). `w` carries the constants, `β` the observed
//! levels, which only the gauges have.
//!
//! **Corrector fields** ([`ContinuousMode::CorrectorField`]). From each gauge `g`, the place's
//! time corrector and range ratio relative to `g` come from the field's dominant constituent
//! there (`compute::cotidal`: `Δt_g = (G(x) − G_g)/ω`, `R_g = (H(x) + H'(x))/(H_g + H'_g)` of
//! the species' two main constituents, the field's complex interpolation of both), and the
//! tide is the blend `Σ β_g [Z0(x) + R_g (h_g(t − Δt_g) − Z0_g)]`: every gauge's record carried
//! to the place by its own correctors, the records blended by distance.
//!
//! **Astronomical + residual** ([`ContinuousMode::AstronomicalResidual`]). The prediction from
//! the place's interpolated constants, plus the gauges' observed non-tidal residuals blended:
//! `Σ w_i P_i(t) + Σ β_g (h_g(t) − P_g(t))`. The complex interpolation is linear in the
//! weights and every station shares the nodal factors, so the place's prediction *is* the
//! weighted sum of the stations' predictions `P_i` (no per-sounding harmonic sum): those are
//! tabulated once on a one-minute grid ([`StationPredictions`]) and interpolated linearly
//! (error below `ω²A·Δt²/8` ≈ 0.02 mm for M2 of 1.5 m). At a gauge with no virtual station
//! near (`w = β`) the tide is the gauge's observed level exactly.
//!
//! **Uncertainty** (GUM, first order; the five components of the discrete budget, in its
//! order, so that every column, report and file keeps its meaning):
//! - *gauge*: `Σ (β_g R_g)² u²_level,g` — each record's sensor, interpolation and fill terms
//!   ([`level_terms`]), independent between gauges (`R_g = 1` in the astronomical mode);
//! - *datum*: `Σ max(w_g, β_g R_g)² u²_datum,g` — the gauges' datum connections, independent.
//!   A datum error moves a gauge's record (coefficient `β_g R_g`) and, when its constants were
//!   analysed from that record, its station's mean level as well, the record's own part then
//!   cancelling (coefficient `w_g`): the larger of the two covers either case. A virtual
//!   station's mean level is taken as tied to chart datum through the gauges: its own datum
//!   uncertainty is not added;
//! - *range* and *timing*: each station's constants carry a relative amplitude error `ε_i`
//!   (standard `u_station_range_ratio`, every constituent scaled) and a time error `τ_i`
//!   (standard `u_station_time_min`, every phase moved by its speed times `τ_i`),
//!   independent between stations. In the corrector mode station `i` moves the place's
//!   phasors `D(x) = Σ w_j D_j`, `P(x)` of the dominant constituent and its partner, hence
//!   every range ratio `R_g = A(x)/A_g` and time corrector `Δt_g = (G(x) − G_g)/ω`, and its
//!   own gauge's `A_g`, `G_g`. The tide's sensitivities are taken exactly to first order with
//!   the complex products `c_i = w_i D_i · conj(D(x))`: `∂A(x)/∂ε_i = Re c_i/|D| (+ partner)`,
//!   `∂G(x)/∂ε_i = −Im c_i/|D|²`, `∂G(x)/∂τ_i = ω Re c_i/|D|²`, `∂A(x)/∂τ_i = ω Im c_i/|D|
//!   (+ partner, its own speed)`; with `T = Σ β_g R_g η_g` (`η_g = h_g − Z0_g`, the level's
//!   tide-varying part) and `Ṫ = Σ β_g R_g ḣ_g`, the coefficient of `ε_i` is
//!   `T ∂ln A/∂ε_i − [i is gauge g] β_g R_g η_g − Ṫ ∂Δt/∂ε_i` and that of `τ_i` likewise.
//!   Both vanish at a gauge standing alone. In the astronomical mode a station's prediction
//!   error enters with `w_i − β_i` (a gauge's own cancels in its residual):
//!   `(w_i − β_i)(P_i − Z0_i) ε_i` and `(w_i − β_i) Ṗ_i τ_i`. Checked against a Monte Carlo
//!   of the stations' errors (GUM Supplement 1) in this module's tests. The discrete budget's
//!   second-order timing term is left out;
//! - *zone* (here: the field's departure from linear): the interpolation variance of a field
//!   whose departure from the linear one has a linear variogram `γ(h) = c·h`, with the
//!   place's weights: `σ² = 2 Σ w_i γ(d_i) − Σ Σ w_i w_j γ(d_ij)` (the kriging variance of
//!   given weights, common practice in geostatistics). `c = 2 u²_field / L` so that the
//!   midpoint of two stations `L = field_scale_m` apart has `σ = u_field_m`; zero at a
//!   station, growing with the distance to the stations, and outside the hull with the
//!   distance beyond it.
//!
//! The zoning still bounds the survey area and names the reporting units: a sounding outside
//! every zone is `outside_zoning`, and the zone it lies in is its reporting zone; the zones'
//! correctors are not used.

use super::cotidal::{dominant, segment_weights, weight_of, Dominant, Field, Station};
use super::harmonic::{predict_grid, HarmonicConstants};
use super::locate::ZoneLocator;
use super::reduce::{Query, Scratch, TideModel, TideOutcome, TideU};
use super::series::TimeInterpolation;
use super::uncertainty::{level_terms, GaugeSlopes, GaugeUncertainty, TideBudget};
use super::zoning::{FeedState, Gauge, NoZoneTide};

/// Which continuous method a project reduces with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ContinuousMode {
    /// Time corrector and range ratio fields from every gauge, blended.
    CorrectorField,
    /// Prediction from the interpolated constants plus the gauges' residuals, blended.
    AstronomicalResidual,
}

impl ContinuousMode {
    /// The word used in the project file and reports.
    pub fn as_str(self) -> &'static str {
        match self {
            ContinuousMode::CorrectorField => "corrector_field",
            ContinuousMode::AstronomicalResidual => "astronomical_residual",
        }
    }
}

/// The field's own uncertainty inputs (see the module's docs).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FieldU {
    /// Standard uncertainty of the field's departure from linear at the midpoint of two
    /// stations `field_scale_m` apart, metres.
    pub u_field_m: f64,
    /// The distance `u_field_m` refers to, metres.
    pub field_scale_m: f64,
    /// A station's relative amplitude error (standard).
    pub u_station_range_ratio: f64,
    /// A station's phase error in minutes of the dominant constituent (standard).
    pub u_station_time_min: f64,
}

/// Predictions of every station on a regular grid, above chart datum.
#[derive(Debug, Clone)]
pub struct StationPredictions {
    /// First grid time, UTC seconds.
    pub t0_s: f64,
    /// Grid step, seconds.
    pub step_s: f64,
    /// Per station, the predicted levels, metres above chart datum.
    pub levels_m: Vec<Vec<f64>>,
}

/// Step of [`StationPredictions`], seconds.
pub const PREDICTION_STEP_S: f64 = 60.0;

impl StationPredictions {
    /// Tabulates `stations`' predictions over `[from_s, to_s]` (widened to whole steps).
    pub fn new(stations: &[Station], from_s: f64, to_s: f64) -> StationPredictions {
        let step_s = PREDICTION_STEP_S;
        let t0_s = (from_s / step_s).floor() * step_s;
        let n = (((to_s - t0_s) / step_s).ceil() as usize + 2).max(2);
        let levels_m = stations
            .iter()
            .map(|s| predict_grid(&s.constants, t0_s, step_s, n))
            .collect();
        StationPredictions {
            t0_s,
            step_s,
            levels_m,
        }
    }

    /// Station `i`'s predicted level and rate at `t_s`, or `None` outside the grid.
    #[inline]
    pub fn at(&self, i: usize, t_s: f64) -> Option<(f64, f64)> {
        let v = &self.levels_m[i];
        let f = (t_s - self.t0_s) / self.step_s;
        if f.is_nan() || f < 0.0 {
            return None;
        }
        let k = f.floor() as usize;
        if k + 1 >= v.len() {
            return None;
        }
        let a = f - k as f64;
        Some((
            v[k] + a * (v[k + 1] - v[k]),
            (v[k + 1] - v[k]) / self.step_s,
        ))
    }
}

/// Weights over the gauges with records (see the module's docs).
#[derive(Debug)]
pub enum Blend {
    /// One gauge: weight 1 everywhere.
    One,
    /// Two gauges: the projection on their segment (their positions in the field's plane).
    Two([(f64, f64); 2]),
    /// Three or more on one line: piecewise linear along it between neighbouring gauges, the
    /// end gauge alone beyond either end (the place projected on the line).
    Line {
        /// A point of the line and its unit direction.
        origin: (f64, f64),
        /// Unit direction.
        dir: (f64, f64),
        /// (blend index, position along the line, metres), sorted by position.
        at: Vec<(usize, f64)>,
    },
    /// Three not in line: their triangle (barycentric inside, the nearest edge outside: the
    /// rule of a triangulation of three, without its search).
    Three([(f64, f64); 3]),
    /// Four or more, not all in line: their own triangulation.
    Field(Box<Field>),
}

impl Blend {
    /// The blend of the gauges `stations` (positions in the field's plane; their constants
    /// serve only to build the triangulation).
    pub fn new(stations: Vec<Station>) -> Blend {
        match stations.len() {
            0 | 1 => Blend::One,
            2 => Blend::Two([
                (stations[0].x_m, stations[0].y_m),
                (stations[1].x_m, stations[1].y_m),
            ]),
            3 => {
                let p = [
                    (stations[0].x_m, stations[0].y_m),
                    (stations[1].x_m, stations[1].y_m),
                    (stations[2].x_m, stations[2].y_m),
                ];
                let det =
                    (p[1].1 - p[2].1) * (p[0].0 - p[2].0) + (p[2].0 - p[1].0) * (p[0].1 - p[2].1);
                let scale = (p[1].0 - p[0].0)
                    .abs()
                    .max((p[1].1 - p[0].1).abs())
                    .max((p[2].0 - p[0].0).abs())
                    .max((p[2].1 - p[0].1).abs());
                if det.abs() > 1e-12 * scale * scale {
                    Blend::Three(p)
                } else {
                    Blend::line(&stations)
                }
            }
            _ => {
                let line = Blend::line(&stations);
                match Field::new(stations) {
                    Ok(f) => Blend::Field(Box::new(f)),
                    // All on one line (or two at one place): along the line.
                    Err(_) => line,
                }
            }
        }
    }

    /// The gauges along the line through the two farthest apart.
    fn line(stations: &[Station]) -> Blend {
        let p: Vec<(f64, f64)> = stations.iter().map(|s| (s.x_m, s.y_m)).collect();
        let mut far = (0, 0, 0.0);
        for i in 0..p.len() {
            for j in i + 1..p.len() {
                let d = norm((p[j].0 - p[i].0, p[j].1 - p[i].1));
                if d > far.2 {
                    far = (i, j, d);
                }
            }
        }
        let (i, j, d) = far;
        let dir = if d > 0.0 {
            ((p[j].0 - p[i].0) / d, (p[j].1 - p[i].1) / d)
        } else {
            (1.0, 0.0)
        };
        let origin = p[i];
        let mut at: Vec<(usize, f64)> = p
            .iter()
            .enumerate()
            .map(|(k, q)| (k, (q.0 - origin.0) * dir.0 + (q.1 - origin.1) * dir.1))
            .collect();
        at.sort_by(|a, b| a.1.total_cmp(&b.1));
        Blend::Line { origin, dir, at }
    }

    /// Weights (gauge-list index within the blend, weight) at a place, into `out`.
    pub fn weights_into(&self, x_m: f64, y_m: f64, out: &mut Vec<(usize, f64)>) {
        out.clear();
        match self {
            Blend::One => out.push((0, 1.0)),
            Blend::Two([a, b]) => {
                let (wa, wb, _) = segment_weights(*a, *b, x_m, y_m);
                out.extend([(0, wa), (1, wb)]);
            }
            Blend::Line { origin, dir, at } => {
                let u = (x_m - origin.0) * dir.0 + (y_m - origin.1) * dir.1;
                let k = at.partition_point(|a| a.1 <= u);
                if k == 0 {
                    out.push((at[0].0, 1.0));
                } else if k == at.len() {
                    out.push((at[k - 1].0, 1.0));
                } else {
                    let (a, b) = (at[k - 1], at[k]);
                    let len = b.1 - a.1;
                    let s = if len > 0.0 { (u - a.1) / len } else { 0.0 };
                    out.extend([(a.0, 1.0 - s), (b.0, s)]);
                }
            }
            Blend::Three(p) => {
                let det =
                    (p[1].1 - p[2].1) * (p[0].0 - p[2].0) + (p[2].0 - p[1].0) * (p[0].1 - p[2].1);
                let l0 =
                    ((p[1].1 - p[2].1) * (x_m - p[2].0) + (p[2].0 - p[1].0) * (y_m - p[2].1)) / det;
                let l1 =
                    ((p[2].1 - p[0].1) * (x_m - p[2].0) + (p[0].0 - p[2].0) * (y_m - p[2].1)) / det;
                let l2 = 1.0 - l0 - l1;
                if l0 >= 0.0 && l1 >= 0.0 && l2 >= 0.0 {
                    out.extend([(0, l0), (1, l1), (2, l2)]);
                } else {
                    let mut best = (f64::INFINITY, 0, 1, 1.0, 0.0);
                    for (a, b) in [(0, 1), (1, 2), (2, 0)] {
                        let (wa, wb, d2) = segment_weights(p[a], p[b], x_m, y_m);
                        if d2 < best.0 {
                            best = (d2, a, b, wa, wb);
                        }
                    }
                    out.extend([(best.1, best.3), (best.2, best.4)]);
                }
            }
            Blend::Field(f) => {
                f.weights_into(x_m, y_m, out);
            }
        }
    }
}

/// Why a continuous model cannot be set up from a field.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ContinuousError {
    /// The field has no stations.
    #[error("the field has no stations")]
    NoStations,
    /// The dominant constituent is not held by every station.
    #[error("the dominant constituent {0} is not held by every station of the field")]
    DominantNotCommon(&'static str),
    /// A station has no amplitude of the dominant constituent.
    #[error("station '{0}' has no amplitude of the dominant constituent")]
    NoDominantAmplitude(String),
    /// No gauge with a record is a station.
    #[error("no gauge with a record is a station of the field (a gauge becomes one when it names its `constants`)")]
    NoRecordingStation,
}

/// Everything a continuous model needs that does not depend on the soundings' plane, built
/// once per run.
#[derive(Debug)]
pub struct ContinuousSetup {
    /// The method.
    pub mode: ContinuousMode,
    /// Per station of the field: the gauge (gauge-list index) it is, or `None` for a virtual
    /// station.
    pub station_gauge: Vec<Option<usize>>,
    /// The gauges with records in the blend, in blend order: (gauge-list index, station index).
    pub blend_gauges: Vec<(usize, usize)>,
    /// The dominant constituent (of the stations' mean constants).
    pub dominant: Dominant,
    /// Its speed, radians per second.
    pub omega_rad_per_s: f64,
    /// Its species partner's speed, radians per second (0 when the field lacks it).
    pub omega_partner_rad_per_s: f64,
    /// Per station: dominant and partner phasors (re, im), and Z0, metres.
    pub station_terms: Vec<StationTerms>,
    /// Station predictions (astronomical mode; empty otherwise).
    pub predictions: Option<StationPredictions>,
    /// The field's own uncertainty inputs.
    pub field_u: FieldU,
}

/// A station's dominant-species phasors and mean level.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StationTerms {
    /// Dominant constituent `H·e^{−iG}`.
    pub dom: (f64, f64),
    /// Its species partner's (zero when the station lacks it).
    pub partner: (f64, f64),
    /// Mean level Z0 above chart datum, metres.
    pub z0_m: f64,
    /// The dominant constituent's phase lag G, radians.
    pub dom_phase_rad: f64,
    /// The dominant species' amplitude `|dominant| + |partner|`, metres.
    pub species_amp_m: f64,
}

impl ContinuousSetup {
    /// The terms of `field`'s stations. `station_gauge[i]` names the gauge station `i` is;
    /// `span_s` the times predictions are tabulated for (astronomical mode).
    pub fn new(
        mode: ContinuousMode,
        field: &Field,
        station_gauge: Vec<Option<usize>>,
        span_s: (f64, f64),
        field_u: FieldU,
    ) -> Result<ContinuousSetup, ContinuousError> {
        let stations = field.stations();
        let mean = super::cotidal::mean_constants(
            &stations
                .iter()
                .map(|s| s.constants.clone())
                .collect::<Vec<HarmonicConstants>>(),
        )
        .ok_or(ContinuousError::NoStations)?;
        let dom = dominant(&mean);
        let k_of = |name: &str| field.constituents().iter().position(|c| c.name == name);
        let kd = k_of(dom.name()).ok_or(ContinuousError::DominantNotCommon(dom.name()))?;
        let kp = k_of(dom.partner());
        let omega_rad_per_s = field.constituents()[kd].speed_deg_per_h.to_radians() / 3600.0;
        let omega_partner_rad_per_s = kp.map_or(0.0, |k| {
            field.constituents()[k].speed_deg_per_h.to_radians() / 3600.0
        });
        let station_terms = (0..stations.len())
            .map(|i| {
                let dom = field.station_phasor(i, kd);
                let partner = kp.map_or((0.0, 0.0), |k| field.station_phasor(i, k));
                StationTerms {
                    dom,
                    partner,
                    z0_m: stations[i].constants.z0_m,
                    dom_phase_rad: (-dom.1).atan2(dom.0),
                    species_amp_m: dom.0.hypot(dom.1) + partner.0.hypot(partner.1),
                }
            })
            .collect::<Vec<_>>();
        if let Some(i) = station_terms
            .iter()
            .position(|t| t.dom.0.hypot(t.dom.1) <= 0.0)
        {
            return Err(ContinuousError::NoDominantAmplitude(stations[i].id.clone()));
        }
        let blend_gauges = station_gauge
            .iter()
            .enumerate()
            .filter_map(|(i, g)| g.map(|g| (g, i)))
            .collect::<Vec<_>>();
        if blend_gauges.is_empty() {
            return Err(ContinuousError::NoRecordingStation);
        }
        // Predicted from the field's common constituents only: the place's prediction is then
        // exactly the field's interpolation, and a gauge's own minor constituents travel with
        // its residual.
        let predictions = (mode == ContinuousMode::AstronomicalResidual).then(|| {
            let common: Vec<Station> = stations
                .iter()
                .map(|s| {
                    let mut s = s.clone();
                    s.constants
                        .constituents
                        .retain(|(c, _, _)| field.constituents().iter().any(|f| f.name == c.name));
                    s
                })
                .collect();
            StationPredictions::new(&common, span_s.0, span_s.1)
        });
        Ok(ContinuousSetup {
            mode,
            station_gauge,
            blend_gauges,
            dominant: dom,
            omega_rad_per_s,
            omega_partner_rad_per_s,
            station_terms,
            predictions,
            field_u,
        })
    }
}

/// The field and the blend in one soundings plane, with the conversion to it.
#[derive(Debug)]
pub struct PlaneField {
    /// The field, stations in this plane (same station order as the setup's).
    pub field: Field,
    /// The blend of the gauges with records, in this plane.
    pub blend: Blend,
    /// Soundings' coordinates to this plane's metres.
    pub plane: Plane,
    /// Distances between the field's stations, metres, row-major (`i · n + j`).
    pub pair_m: Vec<f64>,
}

impl PlaneField {
    /// The field and blend in a plane, with the stations' distances tabulated.
    pub fn new(field: Field, blend: Blend, plane: Plane) -> PlaneField {
        let st = field.stations();
        let pair_m = st
            .iter()
            .flat_map(|a| st.iter().map(move |b| norm((a.x_m - b.x_m, a.y_m - b.y_m))))
            .collect();
        PlaneField {
            field,
            blend,
            plane,
            pair_m,
        }
    }
}

/// The length of a vector (its components are metres apart at most a few hundred kilometres,
/// so the squares cannot overflow: no need for `hypot`'s care, which is slow).
#[inline]
fn norm((x, y): (f64, f64)) -> f64 {
    (x * x + y * y).sqrt()
}

/// The WGS 84 mean radius `(2a + b)/3`, metres (IUGG; the sphere the local planes use).
pub const EARTH_MEAN_RADIUS_M: f64 = 6_371_008.8;

/// How a sounding's coordinates reach the field's plane.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Plane {
    /// The soundings' CRS is projected (metres): used as is.
    Projected,
    /// Longitude and latitude in degrees: a local equirectangular plane about `(lon0, lat0)`
    /// (metres per degree along each axis). Its scale error grows as `tan φ0 · Δφ` away from
    /// the centre (about 2e-3 at 10 km at 50° latitude): it moves a weight by as much, far
    /// inside what a tide field needs.
    LonLat {
        /// Centre longitude, degrees.
        lon0: f64,
        /// Centre latitude, degrees.
        lat0: f64,
        /// Metres per degree of longitude.
        kx: f64,
        /// Metres per degree of latitude.
        ky: f64,
    },
}

impl Plane {
    /// The local plane about `(lon0, lat0)` (spherical Earth of the WGS 84 mean radius).
    pub fn lonlat(lon0: f64, lat0: f64) -> Plane {
        let ky = EARTH_MEAN_RADIUS_M * std::f64::consts::PI / 180.0;
        Plane::LonLat {
            lon0,
            lat0,
            kx: ky * lat0.to_radians().cos(),
            ky,
        }
    }

    /// Coordinates in the plane, metres.
    #[inline]
    pub fn to_plane(&self, x: f64, y: f64) -> (f64, f64) {
        match *self {
            Plane::Projected => (x, y),
            Plane::LonLat { lon0, lat0, kx, ky } => ((x - lon0) * kx, (y - lat0) * ky),
        }
    }
}

/// A continuous tide model on one soundings plane.
#[derive(Debug)]
pub struct ContinuousTide<'a> {
    /// The plane-independent part.
    pub setup: &'a ContinuousSetup,
    /// The field in the soundings' plane.
    pub plane: &'a PlaneField,
    /// The gauges (records above chart datum).
    pub gauges: &'a [Gauge],
    /// Zones in the soundings' plane: the survey area and the reporting units.
    pub locator: &'a ZoneLocator,
    /// Time interpolation of the records.
    pub interp: &'a dyn TimeInterpolation,
    /// A gauge without a level leaves the blend, the others' weights renormalised
    /// (`[gap_fill] renormalise_feeds`); otherwise the sounding has no tide.
    pub renormalise: bool,
    /// Uncertainty inputs of the gauges; `None`: no budget.
    pub unc: Option<ContinuousU<'a>>,
}

/// The gauges' uncertainty inputs for a continuous model.
#[derive(Debug, Clone, Copy)]
pub struct ContinuousU<'a> {
    /// Per gauge, gauge order.
    pub gauge_u: &'a [GaugeUncertainty],
    /// Each gauge's rate and curvature.
    pub rates: &'a [GaugeSlopes],
}

/// The blend's weights after gauges without a level leave it; `None` when none is left.
fn renormalised(states: &mut [FeedState]) -> Option<()> {
    let present: f64 = states.iter().filter(|s| !s.missing).map(|s| s.weight).sum();
    if present <= 0.0 {
        return None;
    }
    for s in states.iter_mut() {
        s.weight = if s.missing { 0.0 } else { s.weight / present };
    }
    Some(())
}

impl ContinuousTide<'_> {
    /// The field's interpolation variance at a place with station weights `w` (module docs).
    fn field_variance_m2(&self, px: f64, py: f64, w: &[(usize, f64)]) -> f64 {
        let fu = &self.setup.field_u;
        if fu.u_field_m <= 0.0 || fu.field_scale_m <= 0.0 {
            return 0.0;
        }
        let st = self.plane.field.stations();
        let n = st.len();
        let c = 2.0 * fu.u_field_m * fu.u_field_m / fu.field_scale_m;
        let mut a = 0.0;
        let mut b = 0.0;
        for &(i, wi) in w {
            a += wi * norm((st[i].x_m - px, st[i].y_m - py));
            for &(j, wj) in w {
                b += wi * wj * self.plane.pair_m[i * n + j];
            }
        }
        (c * (2.0 * a - b)).max(0.0)
    }
}

/// Most gauges a place's blend holds (a triangle's corners).
const MAX_BLEND: usize = 3;

/// A blended gauge's corrector from the place: time corrector (seconds), range ratio and its
/// station.
type Carried = (f64, f64, usize);

impl TideModel for ContinuousTide<'_> {
    fn tide_at(&self, q: &Query, s: &mut Scratch) -> TideOutcome {
        let Some(zone) = self.locator.locate(q.x, q.y) else {
            return TideOutcome::Outside;
        };
        let (px, py) = self.plane.plane.to_plane(q.x, q.y);
        let setup = self.setup;
        let terms = &setup.station_terms;
        self.plane
            .field
            .weights_near(px, py, &mut s.weights, &mut s.face);
        self.plane.blend.weights_into(px, py, &mut s.blend);
        // The place's dominant-species phasors and mean level.
        let (mut dom, mut par, mut z0) = ((0.0, 0.0), (0.0, 0.0), 0.0);
        for &(i, wi) in &s.weights {
            let t = &terms[i];
            dom = (dom.0 + wi * t.dom.0, dom.1 + wi * t.dom.1);
            par = (par.0 + wi * t.partner.0, par.1 + wi * t.partner.1);
            z0 += wi * t.z0_m;
        }
        let amp = norm(dom) + norm(par);
        let place_phase_rad = match setup.mode {
            ContinuousMode::CorrectorField => (-dom.1).atan2(dom.0),
            ContinuousMode::AstronomicalResidual => 0.0,
        };
        // The blend as gauge states, and beside each its corrector from the place.
        s.states.clear();
        let mut carried: [Carried; MAX_BLEND] = [(0.0, 1.0, 0); MAX_BLEND];
        let mut first_missing: Option<NoZoneTide> = None;
        for &(k, wk) in &s.blend {
            if wk <= 0.0 || s.states.len() == MAX_BLEND {
                continue;
            }
            let (g, station) = setup.blend_gauges[k];
            let (dt_s, ratio) = match setup.mode {
                ContinuousMode::CorrectorField => {
                    let t = &terms[station];
                    let dg = wrap_pi(place_phase_rad - t.dom_phase_rad);
                    (dg / setup.omega_rad_per_s, amp / t.species_amp_m)
                }
                ContinuousMode::AstronomicalResidual => (0.0, 1.0),
            };
            let mut st = FeedState {
                gauge: g,
                at_s: q.t_s - dt_s,
                level: super::series::LevelAt {
                    height_m: 0.0,
                    rate_m_per_s: 0.0,
                    bracket: 0,
                },
                weight: wk,
                missing: false,
            };
            match self.interp.level_at(&self.gauges[g].series, st.at_s) {
                Ok(level) => st.level = level,
                Err(why) => {
                    st.missing = true;
                    first_missing.get_or_insert(NoZoneTide {
                        gauge: g,
                        at_s: st.at_s,
                        why,
                    });
                }
            }
            carried[s.states.len()] = (dt_s, ratio, station);
            s.states.push(st);
        }
        if let Some(why) = first_missing {
            if !self.renormalise || renormalised(&mut s.states).is_none() {
                return TideOutcome::NoData { zone, why };
            }
        }
        let outside_span = TideOutcome::NoCorrection {
            zone: Some(zone),
            why: "the time lies outside the span the stations' predictions were made for",
            flagged: false,
        };
        let mut tide = 0.0;
        match (setup.mode, setup.predictions.as_ref()) {
            (ContinuousMode::CorrectorField, _) => {
                for (st, &(_, ratio, i)) in s.states.iter().zip(&carried) {
                    if !st.missing {
                        tide += st.weight * (z0 + ratio * (st.level.height_m - terms[i].z0_m));
                    }
                }
            }
            (ContinuousMode::AstronomicalResidual, Some(p)) => {
                for &(i, wi) in &s.weights {
                    match p.at(i, q.t_s) {
                        Some((v, _)) => tide += wi * v,
                        None => return outside_span,
                    }
                }
                for (st, &(_, _, i)) in s.states.iter().zip(&carried) {
                    if st.missing {
                        continue;
                    }
                    match p.at(i, q.t_s) {
                        Some((v, _)) => tide += st.weight * (st.level.height_m - v),
                        None => return outside_span,
                    }
                }
            }
            (ContinuousMode::AstronomicalResidual, None) => return outside_span,
        }
        if !tide.is_finite() {
            return TideOutcome::NoCorrection {
                zone: Some(zone),
                why: "the field's tide is not a finite number: check the stations' constants",
                flagged: false,
            };
        }
        let u = self
            .unc
            .map(|u| TideU::from(self.budget(q.t_s, (px, py), s, &carried, (dom, par), u)));
        TideOutcome::Tide {
            zone,
            tide_m: tide,
            u,
            filled: None,
        }
    }
}

impl ContinuousTide<'_> {
    /// The tide's budget at a place (module docs): `carried` beside `s.states`, `phasors` the
    /// place's dominant and partner phasors `D(x)`, `P(x)` (re, im), metres.
    fn budget(
        &self,
        t_s: f64,
        (px, py): (f64, f64),
        s: &Scratch,
        carried: &[Carried; MAX_BLEND],
        (dom, par): ((f64, f64), (f64, f64)),
        u: ContinuousU<'_>,
    ) -> TideBudget {
        let setup = self.setup;
        let terms = &setup.station_terms;
        let fu = &setup.field_u;
        let u_tau_s = fu.u_station_time_min * 60.0;
        let mut v = [0.0; 5];
        // Every station the tide rests on: (station, w_i, β_i, own range term, own rate term).
        let mut rows = [(0usize, 0.0, 0.0, 0.0, 0.0); 2 * MAX_BLEND];
        let mut n = 0;
        for &(i, wi) in s.weights.iter().take(MAX_BLEND) {
            rows[n] = (i, wi, 0.0, 0.0, 0.0);
            n += 1;
        }
        let (mut t_range, mut t_rate) = (0.0, 0.0);
        for (st, &(_, ratio, i)) in s.states.iter().zip(carried) {
            if st.missing {
                continue;
            }
            let gu = &u.gauge_u[st.gauge];
            let lt = level_terms(&self.gauges[st.gauge], gu, &u.rates[st.gauge], st);
            v[0] += (st.weight * ratio).powi(2) * lt.var_m2;
            // A datum error moves the record (coefficient β_g R_g) and, when the constants
            // were analysed from the record, its station's mean level too (coefficient w_g,
            // the record's own part cancelling): the larger of the two, whichever holds.
            let w_g = weight_of(&s.weights, i);
            v[1] += (w_g.max(st.weight * ratio) * gu.u_datum_m).powi(2);
            let e_range = st.weight * ratio * (st.level.height_m - terms[i].z0_m);
            let e_rate = st.weight * ratio * lt.rate_m_per_s;
            t_range += e_range;
            t_rate += e_rate;
            let r = match rows[..n].iter().position(|r| r.0 == i) {
                Some(r) => r,
                None => {
                    rows[n] = (i, 0.0, 0.0, 0.0, 0.0);
                    n += 1;
                    n - 1
                }
            };
            rows[r].2 += st.weight;
            rows[r].3 += e_range;
            rows[r].4 += e_rate;
        }
        match (setup.mode, setup.predictions.as_ref()) {
            (ContinuousMode::CorrectorField, _) => {
                // Exact first-order sensitivities of the blend to station i's amplitude error
                // ε_i and time error τ_i, through the place's phasors D(x), P(x) (module docs).
                let d2 = dom.0 * dom.0 + dom.1 * dom.1;
                let (dn, pn) = (d2.sqrt(), norm(par));
                let amp = dn + pn;
                // (re, im) of w_i Z_i · conj(Z(x)).
                let cross = |z: (f64, f64), at: (f64, f64), wi: f64| {
                    (
                        wi * (z.0 * at.0 + z.1 * at.1),
                        wi * (z.1 * at.0 - z.0 * at.1),
                    )
                };
                let (om, op) = (setup.omega_rad_per_s, setup.omega_partner_rad_per_s);
                for &(i, wi, _, own_range, own_rate) in &rows[..n] {
                    let t = &terms[i];
                    let cd = cross(t.dom, dom, wi);
                    let cp = cross(t.partner, par, wi);
                    let (mut a_i, mut b_i, mut d_i, mut e_i) = (0.0, 0.0, 0.0, 0.0);
                    if amp > 0.0 && dn > 0.0 {
                        // ∂A(x)/∂ε_i / A(x); ∂Δt/∂ε_i = −b_i; ∂Δt/∂τ_i = d_i (− 1 at the
                        // gauge); ∂A(x)/∂τ_i / A(x) = e_i.
                        a_i = (cd.0 / dn + if pn > 0.0 { cp.0 / pn } else { 0.0 }) / amp;
                        b_i = cd.1 / (d2 * om);
                        d_i = cd.0 / d2;
                        e_i = (om * cd.1 / dn + if pn > 0.0 { op * cp.1 / pn } else { 0.0 }) / amp;
                    }
                    v[2] += (a_i * t_range - own_range + b_i * t_rate).powi(2);
                    v[3] += (e_i * t_range - (d_i * t_rate - own_rate)).powi(2);
                }
                v[2] *= fu.u_station_range_ratio.powi(2);
                v[3] *= u_tau_s.powi(2);
            }
            (ContinuousMode::AstronomicalResidual, Some(p)) => {
                // A station's prediction error enters with w_i − β_i: a gauge's own cancels
                // in its residual.
                for &(i, wi, beta, _, _) in &rows[..n] {
                    if let Some((val, rate)) = p.at(i, t_s) {
                        let d = wi - beta;
                        v[2] += (d * (val - terms[i].z0_m) * fu.u_station_range_ratio).powi(2);
                        v[3] += (d * rate * u_tau_s).powi(2);
                    }
                }
            }
            (ContinuousMode::AstronomicalResidual, None) => {}
        }
        if s.states.iter().any(|st| st.missing) {
            // A gauge left out of the blend: the renormalised blend risks the field's own
            // departure from linear (first order).
            v[4] += fu.u_field_m.powi(2);
        }
        v[4] += self.field_variance_m2(px, py, &s.weights);
        TideBudget { variances_m2: v }
    }
}

/// An angle wrapped to (−π, π].
#[inline]
fn wrap_pi(a: f64) -> f64 {
    let t = std::f64::consts::TAU;
    let r = (a + std::f64::consts::PI).rem_euclid(t) - std::f64::consts::PI;
    if r <= -std::f64::consts::PI {
        r + t
    } else {
        r
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::astro::constituent;
    use crate::compute::harmonic::predict_at;
    use crate::compute::series::{Configured, LevelSeries};
    use crate::compute::uncertainty::rate_series;

    /// Start of the records: 2026-06-14T00:00:00Z.
    const T0_S: f64 = 1_781_395_200.0;
    /// Gauges A, B, C (records) and a virtual station V, in metres.
    const PLACES: [(f64, f64); 4] = [
        (0.0, 0.0),
        (20_000.0, 0.0),
        (0.0, 20_000.0),
        (20_000.0, 20_000.0),
    ];

    /// The constants of a field whose M2 and S2 phasors and Z0 are linear in x and y (so the
    /// barycentric interpolation of the phasors reproduces them exactly inside a triangle, a
    /// fact of geometry); `with_s2 = false` leaves M2 alone.
    fn linear_constants(x: f64, y: f64, with_s2: bool) -> HarmonicConstants {
        let ph = |z: (f64, f64), zx: (f64, f64), zy: (f64, f64)| {
            let (re, im) = (z.0 + zx.0 * x + zy.0 * y, z.1 + zx.1 * x + zy.1 * y);
            (re.hypot(im), (-im).atan2(re).to_degrees().rem_euclid(360.0))
        };
        let (h2, g2) = ph((1.2, -0.5), (1.5e-5, -1.0e-5), (-0.8e-5, -1.6e-5));
        let (hs, gs) = ph((0.35, -0.2), (0.4e-5, -0.3e-5), (-0.2e-5, -0.5e-5));
        let mut constituents = vec![(constituent("M2").unwrap(), h2, g2)];
        if with_s2 {
            constituents.push((constituent("S2").unwrap(), hs, gs));
        }
        HarmonicConstants {
            z0_m: 2.5 + 1.0e-5 * x - 0.5e-5 * y,
            constituents,
        }
    }

    /// A non-tidal residual common to the area, metres.
    fn residual_m(t_s: f64) -> f64 {
        0.12 * ((t_s - T0_S) / 86_400.0 * std::f64::consts::PI).sin()
    }

    struct World {
        gauges: Vec<Gauge>,
        plane: PlaneField,
        locator: ZoneLocator,
        rates: Vec<GaugeSlopes>,
        gauge_u: Vec<GaugeUncertainty>,
    }

    /// Three gauges with 1-min records (their own prediction plus the common residual when
    /// `surge`) and the virtual station; stations' constants from `constants(i)`.
    fn world(constants: &dyn Fn(usize) -> HarmonicConstants, truth_s2: bool, surge: bool) -> World {
        let times: Vec<f64> = (0..2 * 1440).map(|k| T0_S + 60.0 * k as f64).collect();
        let gauges: Vec<Gauge> = (0..3)
            .map(|i| {
                let k = linear_constants(PLACES[i].0, PLACES[i].1, truth_s2);
                Gauge {
                    id: format!("g{i}"),
                    series: LevelSeries {
                        heights_m: times
                            .iter()
                            .map(|&t| predict_at(&k, t) + if surge { residual_m(t) } else { 0.0 })
                            .collect(),
                        times_s: times.clone(),
                        max_gap_s: 120.0,
                        ..Default::default()
                    },
                    mean_level_above_datum_m: k.z0_m,
                }
            })
            .collect();
        let square = geo::MultiPolygon(vec![geo::Polygon::new(
            geo::LineString::from(vec![
                (-50_000.0, -50_000.0),
                (70_000.0, -50_000.0),
                (70_000.0, 70_000.0),
                (-50_000.0, 70_000.0),
                (-50_000.0, -50_000.0),
            ]),
            vec![],
        )]);
        let rates = gauges.iter().map(|g| rate_series(g, &Configured)).collect();
        World {
            gauges,
            plane: plane_of(constants),
            locator: ZoneLocator::new(vec![square]),
            rates,
            gauge_u: vec![
                GaugeUncertainty {
                    u_gauge_m: 0.01,
                    u_datum_m: 0.02,
                };
                3
            ],
        }
    }

    /// The field of the three gauges and the virtual station with `constants(i)`.
    fn plane_of(constants: &dyn Fn(usize) -> HarmonicConstants) -> PlaneField {
        let stations: Vec<Station> = (0..4)
            .map(|i| Station {
                id: format!("s{i}"),
                x_m: PLACES[i].0,
                y_m: PLACES[i].1,
                constants: constants(i),
                is_virtual: i == 3,
            })
            .collect();
        PlaneField::new(
            Field::new(stations.clone()).unwrap(),
            Blend::new(stations[..3].to_vec()),
            Plane::Projected,
        )
    }

    fn field_u() -> FieldU {
        FieldU {
            u_field_m: 0.05,
            field_scale_m: 20_000.0,
            u_station_range_ratio: 0.02,
            u_station_time_min: 3.0,
        }
    }

    fn setup(plane: &PlaneField, mode: ContinuousMode) -> ContinuousSetup {
        ContinuousSetup::new(
            mode,
            &plane.field,
            vec![Some(0), Some(1), Some(2), None],
            (T0_S, T0_S + 2.0 * 86_400.0),
            field_u(),
        )
        .unwrap()
    }

    /// Tide and budget variances at a place and time.
    fn tide(w: &World, s: &ContinuousSetup, x: f64, y: f64, t_s: f64) -> (f64, [f64; 5]) {
        tide_on(w, &w.plane, s, (x, y), t_s)
    }

    fn tide_on(
        w: &World,
        plane: &PlaneField,
        s: &ContinuousSetup,
        (x, y): (f64, f64),
        t_s: f64,
    ) -> (f64, [f64; 5]) {
        let m = ContinuousTide {
            setup: s,
            plane,
            gauges: &w.gauges,
            locator: &w.locator,
            interp: &Configured,
            renormalise: false,
            unc: Some(ContinuousU {
                gauge_u: &w.gauge_u,
                rates: &w.rates,
            }),
        };
        let q = Query {
            x,
            y,
            t_s,
            line: "",
        };
        match m.tide_at(&q, &mut Scratch::default()) {
            TideOutcome::Tide { tide_m, u, .. } => {
                let u = u.expect("a budget was asked for");
                (tide_m, u.parts_m.map(|p| p * p))
            }
            other => panic!("no tide at ({x}, {y}): {other:?}"),
        }
    }

    fn exact(i: usize) -> HarmonicConstants {
        linear_constants(PLACES[i].0, PLACES[i].1, true)
    }

    /// At a gauge that stands alone in its weights the tide is the gauge's own level (both
    /// modes: `Z0_g + 1·(h_g − Z0_g)`, `P_g + (h_g − P_g)`), and the budget holds no station
    /// term and no field term (the kriging variance is zero at a station: common practice in
    /// geostatistics).
    #[test]
    fn at_a_gauge_the_tide_is_its_level_and_no_field_term_is_added() {
        let w = world(&exact, true, true);
        for mode in [
            ContinuousMode::CorrectorField,
            ContinuousMode::AstronomicalResidual,
        ] {
            let s = setup(&w.plane, mode);
            for (g, &(x, y)) in PLACES[..3].iter().enumerate() {
                let k = 500;
                let t = w.gauges[g].series.times_s[k];
                let (tide_m, v) = tide(&w, &s, x, y, t);
                assert!(
                    (tide_m - w.gauges[g].series.heights_m[k]).abs() < 1e-9,
                    "{mode:?} g{g}: {tide_m}"
                );
                assert!(v[2] < 1e-18 && v[3] < 1e-18, "{mode:?} g{g}: {v:?}");
                assert!(v[4] < 1e-18, "{mode:?} g{g}: {v:?}");
                assert!((v[0] - 0.01f64.powi(2)).abs() < 1e-9, "{mode:?}: {v:?}");
                assert!((v[1] - 0.02f64.powi(2)).abs() < 1e-12, "{mode:?}: {v:?}");
            }
        }
    }

    /// A tide that is the prediction of a field linear in space plus a residual common to the
    /// area is reproduced inside the hull by the astronomical mode: the prediction is linear in
    /// the phasors (nodal factors shared), and the blended residual is the common one. The
    /// only errors are the one-minute prediction grid's (below 0.02 mm for M2 of 1.5 m) and
    /// the records' linear interpolation at a minute's step (below 0.01 mm).
    #[test]
    fn the_astronomical_mode_reproduces_a_linear_field_with_a_common_residual() {
        let w = world(&exact, true, true);
        let s = setup(&w.plane, ContinuousMode::AstronomicalResidual);
        for (x, y) in [(5_000.0, 4_000.0), (14_000.0, 9_000.0), (6_000.0, 12_500.0)] {
            for k in [10, 333, 901, 1999] {
                let t = T0_S + 60.0 * k as f64 + 17.0;
                let truth = predict_at(&linear_constants(x, y, true), t) + residual_m(t);
                let (got, _) = tide(&w, &s, x, y, t);
                assert!(
                    (got - truth).abs() < 1e-4,
                    "({x}, {y}) {k}: {got} vs {truth}"
                );
            }
        }
    }

    /// With one constituent the corrector mode is exact: a gauge's record shifted by the time
    /// corrector `(G(x) − G_g)/ω` and scaled by `A(x)/A_g` about its mean is the place's
    /// prediction (DOMAIN §4.2; the nodal phase `u` changes over years, not minutes), so
    /// every gauge carries the same tide and their blend is it, inside the hull and beyond it
    /// (where the phasors are those of the nearest hull edge).
    #[test]
    fn the_corrector_mode_is_exact_for_one_constituent() {
        let m2 = |i: usize| linear_constants(PLACES[i].0, PLACES[i].1, false);
        let w = world(&m2, false, false);
        let s = setup(&w.plane, ContinuousMode::CorrectorField);
        for (x, y) in [
            (5_000.0, 4_000.0),
            (14_000.0, 9_000.0),
            (10_000.0, -3_000.0),
        ] {
            let at = w.plane.field.constants_at(x, y).0;
            for k in [120, 777, 2500] {
                let t = T0_S + 60.0 * k as f64 + 29.0;
                let truth = predict_at(&at, t);
                let (got, _) = tide(&w, &s, x, y, t);
                assert!(
                    (got - truth).abs() < 2e-4,
                    "({x}, {y}) {k}: {got} vs {truth}"
                );
            }
        }
    }

    /// The field term is the linear-variogram kriging variance of the place's weights: at the
    /// midpoint of two stations `field_scale_m` apart it is `u_field_m²` (its definition), and
    /// at a triangle's centroid it is the closed form `c (2 Σ w_i d_i − Σ Σ w_i w_j d_ij)`
    /// worked by hand for the right triangle of legs L: `c L (2·(√5/3)·(… ))` — computed here
    /// from the distances, not from the code's loop.
    #[test]
    fn the_field_term_is_u_field_at_the_midpoint_of_stations_its_scale_apart() {
        let w = world(&exact, true, true);
        let s = setup(&w.plane, ContinuousMode::CorrectorField);
        let t = T0_S + 3_600.0;
        let (_, v) = tide(&w, &s, 10_000.0, 0.0, t);
        assert!((v[4] - 0.05f64.powi(2)).abs() < 1e-12, "{v:?}");
        // The centroid of A, B, C (weights 1/3 each): distances to the corners and between
        // them, with c = 2u²/L.
        let l = 20_000.0f64;
        let c = 2.0 * 0.05f64.powi(2) / l;
        let d_corner = [
            (l / 3.0).hypot(l / 3.0),
            (2.0 * l / 3.0).hypot(l / 3.0),
            (l / 3.0).hypot(2.0 * l / 3.0),
        ];
        let d_pairs = 2.0 * (l + l + l * 2f64.sqrt()); // every ordered pair i ≠ j
        let expected = c * (2.0 * d_corner.iter().sum::<f64>() / 3.0 - d_pairs / 9.0);
        let (_, v) = tide(&w, &s, l / 3.0, l / 3.0, t);
        assert!((v[4] - expected).abs() < 1e-9, "{} vs {expected}", v[4]);
    }

    /// Monte Carlo check of the station terms (GUM Supplement 1, JCGM 101:2008, propagation
    /// of distributions): draw every station's amplitude error `ε_i ~ N(0, u_r)` (all its
    /// constituents scaled) or time error `τ_i ~ N(0, u_τ)` (every phase shifted by its speed
    /// times `τ_i`), rebuild the field, and compare the spread of the tide with the budget's
    /// range and timing terms. 400 draws estimate a standard deviation to about 3.5 %; the
    /// first-order budget must agree within 15 %.
    #[test]
    fn the_station_terms_match_a_monte_carlo_of_the_stations_errors() {
        use rand::{Rng, SeedableRng};
        let base = world(&exact, true, true);
        let t = T0_S + 7.3 * 3_600.0;
        let places = [
            (5_000.0, 4_000.0),
            (14_000.0, 9_000.0),
            (15_000.0, 15_000.0),
        ];
        for mode in [
            ContinuousMode::CorrectorField,
            ContinuousMode::AstronomicalResidual,
        ] {
            let s0 = setup(&base.plane, mode);
            for &(x, y) in &places {
                let (t0, v) = tide(&base, &s0, x, y, t);
                for (term, u_r, u_tau_min) in [(2usize, 0.02, 0.0), (3, 0.0, 3.0)] {
                    let mut rng = rand::rngs::StdRng::seed_from_u64(7 + term as u64);
                    let normal = rand_distr::Normal::new(0.0, 1.0).unwrap();
                    let mut sum2 = 0.0;
                    let n = 400;
                    for _ in 0..n {
                        let draws: Vec<(f64, f64)> = (0..4)
                            .map(|_| (rng.sample(normal) * u_r, rng.sample(normal) * u_tau_min))
                            .collect();
                        let perturbed = |i: usize| {
                            let mut k = exact(i);
                            for c in &mut k.constituents {
                                c.1 *= 1.0 + draws[i].0;
                                c.2 += c.0.speed_deg_per_h * draws[i].1 / 60.0;
                            }
                            k
                        };
                        // The records stay the truth's: only the constants are in error.
                        let plane = plane_of(&perturbed);
                        let s = setup(&plane, mode);
                        let (ti, _) = tide_on(&base, &plane, &s, (x, y), t);
                        sum2 += (ti - t0).powi(2);
                    }
                    let mc = (sum2 / n as f64).sqrt();
                    let budget = v[term].sqrt();
                    eprintln!("{mode:?} ({x}, {y}) term {term}: Monte Carlo {mc:.5} m, budget {budget:.5} m");
                    assert!(
                        (mc - budget).abs() <= 0.15 * mc.max(1e-4),
                        "{mode:?} ({x}, {y}) term {term}: Monte Carlo {mc:.5} m, budget {budget:.5} m"
                    );
                }
            }
        }
    }

    /// The three-gauge blend gives the weights of a triangulation of the three (barycentric
    /// inside, the nearest edge's outside), at places inside, on the edges and beyond each
    /// edge and corner.
    #[test]
    fn the_blend_of_three_gauges_is_their_triangulation() {
        let stations: Vec<Station> = (0..3)
            .map(|i| Station {
                id: format!("s{i}"),
                x_m: PLACES[i].0,
                y_m: PLACES[i].1,
                constants: exact(i),
                is_virtual: false,
            })
            .collect();
        let three = Blend::new(stations.clone());
        assert!(matches!(three, Blend::Three(_)));
        let field = Blend::Field(Box::new(Field::new(stations).unwrap()));
        let (mut a, mut b) = (Vec::new(), Vec::new());
        for x in (-12..=32).map(|k| k as f64 * 1_000.0 + 0.5) {
            for y in (-12..=32).map(|k| k as f64 * 1_000.0 + 0.25) {
                three.weights_into(x, y, &mut a);
                field.weights_into(x, y, &mut b);
                for i in 0..3 {
                    assert!(
                        (weight_of(&a, i) - weight_of(&b, i)).abs() < 1e-9,
                        "({x}, {y}) station {i}: {a:?} vs {b:?}"
                    );
                }
            }
        }
    }

    /// Three gauges on one line: piecewise linear between neighbours, each gauge alone at its
    /// own place and beyond the ends (every gauge keeps a share: none is dropped).
    #[test]
    fn gauges_on_one_line_blend_along_it() {
        let st = |i: usize, x: f64| Station {
            id: format!("s{i}"),
            x_m: x,
            y_m: 0.5 * x,
            constants: exact(0),
            is_virtual: false,
        };
        let b = Blend::new(vec![st(0, 0.0), st(1, 10_000.0), st(2, 4_000.0)]);
        assert!(matches!(b, Blend::Line { .. }), "{b:?}");
        let mut w = Vec::new();
        let at = |b: &Blend, w: &mut Vec<(usize, f64)>, x: f64, off: f64| {
            b.weights_into(x - 0.5 * off, 0.5 * x + off, w);
            let mut v = [0.0; 3];
            for &(i, wi) in w.iter() {
                v[i] += wi;
            }
            v
        };
        assert_eq!(at(&b, &mut w, 4_000.0, 0.0), [0.0, 0.0, 1.0]);
        let v = at(&b, &mut w, 7_000.0, 300.0);
        assert!(
            (v[1] - 0.5).abs() < 1e-12 && (v[2] - 0.5).abs() < 1e-12,
            "{v:?}"
        );
        let v = at(&b, &mut w, 1_000.0, -200.0);
        assert!(
            (v[0] - 0.75).abs() < 1e-12 && (v[2] - 0.25).abs() < 1e-12,
            "{v:?}"
        );
        assert_eq!(at(&b, &mut w, -5_000.0, 0.0), [1.0, 0.0, 0.0]);
        assert_eq!(at(&b, &mut w, 15_000.0, 0.0), [0.0, 1.0, 0.0]);
    }

    /// Stations whose constants list different constituents, in different orders (a virtual
    /// gauge from a tide model with fewer constituents than the gauges' analyses): the setup
    /// matches them by name, keeps the common ones and chooses the dominant from those.
    #[test]
    fn stations_with_other_constituent_lists_set_up_by_name() {
        let mixed = |i: usize| {
            let mut k = exact(i);
            match i {
                0 => k
                    .constituents
                    .push((constituent("K1").unwrap(), 0.08, 120.0)),
                1 => k.constituents.reverse(),
                _ => {}
            }
            k
        };
        let w = world(&mixed, true, true);
        for mode in [
            ContinuousMode::CorrectorField,
            ContinuousMode::AstronomicalResidual,
        ] {
            let s = setup(&w.plane, mode);
            assert_eq!(s.dominant, Dominant::M2);
            let (got, _) = tide(&w, &s, 5_000.0, 4_000.0, T0_S + 5_000.0);
            assert!(got.is_finite());
        }
        assert_eq!(
            crate::compute::cotidal::mean_constants(&[mixed(0), mixed(1)])
                .unwrap()
                .constituents
                .len(),
            2
        );
    }
}
