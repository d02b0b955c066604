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
//! - *datum*: `Σ β_g² u²_datum,g` — the gauges' datum connections, independent (a virtual
//!   station's mean level is taken as tied to chart datum through the gauges: its own datum
//!   uncertainty is not added);
//! - *range* and *timing*: each station's constants carry a relative amplitude error
//!   `u_station_range_ratio` and a phase error `u_station_time_min` (in minutes of the
//!   dominant constituent), independent between stations. Carried from gauge `g` to the place,
//!   the corrector's error scales with `s_g = √Σ_i (w_i − δ_ig)²` (zero at the gauge itself);
//!   in the astronomical mode the prediction's error enters with `w_i − β_i` per station
//!   (the residual cancels a gauge's own prediction error). Range: sensitivity the
//!   tide-varying part of the level, timing: its rate (first order; the discrete budget's
//!   second-order term is left out here);
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

use super::cotidal::{dominant, Dominant, Field, Station};
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
    /// Two gauges: the projection on their segment (positions in the field's plane).
    Two([(f64, f64); 2]),
    /// Three or more, not all in line: their own triangulation.
    Field(Box<Field>),
}

impl Blend {
    /// The blend of gauges at `positions` (in the field's plane; `stations` their constants,
    /// used only to build the triangulation).
    pub fn new(stations: Vec<Station>) -> Blend {
        match stations.len() {
            0 | 1 => Blend::One,
            2 => Blend::Two([
                (stations[0].x_m, stations[0].y_m),
                (stations[1].x_m, stations[1].y_m),
            ]),
            _ => {
                let pos = [
                    (stations[0].x_m, stations[0].y_m),
                    (stations[1].x_m, stations[1].y_m),
                ];
                match Field::new(stations) {
                    Ok(f) => Blend::Field(Box::new(f)),
                    // All in line: the first two carry the blend (the others get weight 0).
                    Err(_) => Blend::Two(pos),
                }
            }
        }
    }

    /// Weights (gauge-list index within the blend, weight) at a place, into `out`.
    pub fn weights_into(&self, x_m: f64, y_m: f64, out: &mut Vec<(usize, f64)>) {
        out.clear();
        match self {
            Blend::One => out.push((0, 1.0)),
            Blend::Two([a, b]) => {
                let (dx, dy) = (b.0 - a.0, b.1 - a.1);
                let len2 = dx * dx + dy * dy;
                let s = if len2 > 0.0 {
                    (((x_m - a.0) * dx + (y_m - a.1) * dy) / len2).clamp(0.0, 1.0)
                } else {
                    0.0
                };
                out.extend([(0, 1.0 - s), (1, s)]);
            }
            Blend::Field(f) => {
                f.weights_into(x_m, y_m, out);
            }
        }
    }
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
    ) -> Result<ContinuousSetup, &'static str> {
        let stations = field.stations();
        let mean = super::cotidal::mean_constants(
            &stations
                .iter()
                .map(|s| s.constants.clone())
                .collect::<Vec<HarmonicConstants>>(),
        )
        .ok_or("the field has no stations")?;
        let dom = dominant(&mean);
        let k_of = |name: &str| field.constituents().iter().position(|c| c.name == name);
        let kd = k_of(dom.name())
            .ok_or("the dominant constituent is not held by every station of the field")?;
        let kp = k_of(dom.partner());
        let omega_rad_per_s = field.constituents()[kd].speed_deg_per_h.to_radians() / 3600.0;
        let station_terms = (0..stations.len())
            .map(|i| StationTerms {
                dom: field.station_phasor(i, kd),
                partner: kp.map_or((0.0, 0.0), |k| field.station_phasor(i, k)),
                z0_m: stations[i].constants.z0_m,
            })
            .collect::<Vec<_>>();
        if station_terms.iter().any(|t| t.dom.0.hypot(t.dom.1) <= 0.0) {
            return Err("a station has no amplitude of the dominant constituent");
        }
        let blend_gauges = station_gauge
            .iter()
            .enumerate()
            .filter_map(|(i, g)| g.map(|g| (g, i)))
            .collect::<Vec<_>>();
        if blend_gauges.is_empty() {
            return Err("no gauge with a record is a station of the field");
        }
        let predictions = (mode == ContinuousMode::AstronomicalResidual)
            .then(|| StationPredictions::new(stations, span_s.0, span_s.1));
        Ok(ContinuousSetup {
            mode,
            station_gauge,
            blend_gauges,
            dominant: dom,
            omega_rad_per_s,
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
}

/// How a sounding's coordinates reach the field's plane.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Plane {
    /// The soundings' CRS is projected (metres): used as is.
    Projected,
    /// Longitude and latitude in degrees: a local equirectangular plane about `(lon0, lat0)`
    /// (metres per degree along each axis), whose scale error over tens of kilometres is
    /// below 1e-4 — far inside what a tide field needs.
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
        const R_M: f64 = 6_371_008.8;
        let ky = R_M * std::f64::consts::PI / 180.0;
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
        let c = 2.0 * fu.u_field_m * fu.u_field_m / fu.field_scale_m;
        let mut a = 0.0;
        let mut b = 0.0;
        for &(i, wi) in w {
            a += wi * (st[i].x_m - px).hypot(st[i].y_m - py);
            for &(j, wj) in w {
                b += wi * wj * (st[i].x_m - st[j].x_m).hypot(st[i].y_m - st[j].y_m);
            }
        }
        (c * (2.0 * a - b)).max(0.0)
    }
}

impl TideModel for ContinuousTide<'_> {
    fn tide_at(&self, q: &Query, s: &mut Scratch) -> TideOutcome {
        let Some(zone) = self.locator.locate(q.x, q.y) else {
            return TideOutcome::Outside;
        };
        let (px, py) = self.plane.plane.to_plane(q.x, q.y);
        let setup = self.setup;
        let terms = &setup.station_terms;
        self.plane.field.weights_into(px, py, &mut s.weights);
        // The blend's weights, kept as gauge states (weight, level) in blend order.
        let mut blend = std::mem::take(&mut s.states);
        blend.clear();
        {
            let mut bw = Vec::with_capacity(3);
            self.plane.blend.weights_into(px, py, &mut bw);
            for (k, wk) in bw {
                if wk <= 0.0 {
                    continue;
                }
                let (g, _) = setup.blend_gauges[k];
                blend.push(FeedState {
                    gauge: g,
                    at_s: q.t_s,
                    level: super::series::LevelAt {
                        height_m: 0.0,
                        rate_m_per_s: 0.0,
                        bracket: 0,
                    },
                    weight: wk,
                    missing: false,
                });
            }
        }
        // The place's dominant-species phasors and mean level.
        let (mut dom, mut par, mut z0) = ((0.0, 0.0), (0.0, 0.0), 0.0);
        for &(i, wi) in &s.weights {
            let t = &terms[i];
            dom = (dom.0 + wi * t.dom.0, dom.1 + wi * t.dom.1);
            par = (par.0 + wi * t.partner.0, par.1 + wi * t.partner.1);
            z0 += wi * t.z0_m;
        }
        let amp = dom.0.hypot(dom.1) + par.0.hypot(par.1);
        // Per blended gauge: its corrector from the place (corrector mode), the level.
        let mut per_gauge: [(f64, f64, usize); 8] = [(0.0, 1.0, 0); 8];
        let mut first_missing: Option<NoZoneTide> = None;
        for (n, st) in blend.iter_mut().enumerate() {
            let station = setup.station_of(st.gauge);
            let (dt_s, ratio) = match setup.mode {
                ContinuousMode::CorrectorField => {
                    let t = &terms[station];
                    let dg = wrap_pi((-dom.1).atan2(dom.0) - (-t.dom.1).atan2(t.dom.0));
                    let gauge_amp = t.dom.0.hypot(t.dom.1) + t.partner.0.hypot(t.partner.1);
                    (dg / setup.omega_rad_per_s, amp / gauge_amp)
                }
                ContinuousMode::AstronomicalResidual => (0.0, 1.0),
            };
            if n < per_gauge.len() {
                per_gauge[n] = (dt_s, ratio, station);
            }
            st.at_s = q.t_s - dt_s;
            match self.interp.level_at(&self.gauges[st.gauge].series, st.at_s) {
                Ok(level) => st.level = level,
                Err(why) => {
                    st.missing = true;
                    first_missing.get_or_insert(NoZoneTide {
                        gauge: st.gauge,
                        at_s: st.at_s,
                        why,
                    });
                }
            }
        }
        if let Some(why) = first_missing {
            if !self.renormalise || renormalised(&mut blend).is_none() {
                s.states = blend;
                return TideOutcome::NoData { zone, why };
            }
        }
        let preds = setup.predictions.as_ref();
        let mut tide = 0.0;
        let mut astro_ok = true;
        match setup.mode {
            ContinuousMode::CorrectorField => {
                for (n, st) in blend.iter().enumerate() {
                    if st.missing {
                        continue;
                    }
                    let (_, ratio, station) = per_gauge[n];
                    tide += st.weight * (z0 + ratio * (st.level.height_m - terms[station].z0_m));
                }
            }
            ContinuousMode::AstronomicalResidual => {
                let p = preds.expect("the astronomical mode tabulates predictions");
                for &(i, wi) in &s.weights {
                    match p.at(i, q.t_s) {
                        Some((v, _)) => tide += wi * v,
                        None => astro_ok = false,
                    }
                }
                for (n, st) in blend.iter().enumerate() {
                    if st.missing {
                        continue;
                    }
                    match p.at(per_gauge[n].2, q.t_s) {
                        Some((v, _)) => tide += st.weight * (st.level.height_m - v),
                        None => astro_ok = false,
                    }
                }
            }
        }
        if !astro_ok {
            s.states = blend;
            return TideOutcome::NoCorrection {
                zone: Some(zone),
                why: "the time lies outside the span the stations' predictions were made for",
                flagged: false,
            };
        }
        let u = self.unc.map(|u| {
            let mut v = [0.0; 5];
            let fu = &setup.field_u;
            let u_dt_s = fu.u_station_time_min * 60.0;
            let (mut c_range, mut c_time) = (0.0, 0.0);
            for (n, st) in blend.iter().enumerate() {
                if st.missing {
                    continue;
                }
                let g = &self.gauges[st.gauge];
                let lt = level_terms(g, &u.gauge_u[st.gauge], &u.rates[st.gauge], st);
                let (_, ratio, station) = per_gauge[n];
                v[0] += (st.weight * ratio).powi(2) * lt.var_m2;
                v[1] += (st.weight * u.gauge_u[st.gauge].u_datum_m).powi(2);
                if setup.mode == ContinuousMode::CorrectorField {
                    // s_g: the weights' distance from the gauge's own station.
                    let s_g = s
                        .weights
                        .iter()
                        .map(|&(i, wi)| if i == station { wi - 1.0 } else { wi })
                        .map(|d| d * d)
                        .sum::<f64>()
                        + if s.weights.iter().any(|&(i, _)| i == station) {
                            0.0
                        } else {
                            1.0
                        };
                    let s_g = s_g.sqrt();
                    let wr = st.weight * ratio;
                    c_range += st.weight * ratio * (st.level.height_m - terms[station].z0_m) * s_g;
                    c_time += wr * lt.rate_m_per_s * s_g;
                }
            }
            if blend.iter().any(|s| s.missing) {
                // A gauge left out of the blend: its weight's share of the field's own
                // departure is what the renormalised blend risks (first order).
                v[4] += fu.u_field_m.powi(2);
            }
            if setup.mode == ContinuousMode::AstronomicalResidual {
                let p = preds.expect("tabulated");
                // Per station: w_i − β_i, with the station's tide-varying part and rate.
                let mut diff = |i: usize, d: f64| {
                    if let Some((val, rate)) = p.at(i, q.t_s) {
                        v[2] += (d * (val - terms[i].z0_m) * fu.u_station_range_ratio).powi(2);
                        v[3] += (d * rate * u_dt_s).powi(2);
                    }
                };
                for &(i, wi) in &s.weights {
                    let beta: f64 = blend
                        .iter()
                        .enumerate()
                        .filter(|(n, st)| !st.missing && per_gauge[*n].2 == i)
                        .map(|(_, st)| st.weight)
                        .sum();
                    diff(i, wi - beta);
                }
                for (n, st) in blend.iter().enumerate() {
                    let i = per_gauge[n].2;
                    if !st.missing && !s.weights.iter().any(|&(j, _)| j == i) {
                        diff(i, -st.weight);
                    }
                }
            } else {
                v[2] = (c_range * fu.u_station_range_ratio).powi(2);
                v[3] = (c_time * u_dt_s).powi(2);
            }
            v[4] += self.field_variance_m2(px, py, &s.weights);
            TideU::from(TideBudget { variances_m2: v })
        });
        s.states = blend;
        if !tide.is_finite() {
            return TideOutcome::NoCorrection {
                zone: Some(zone),
                why: "the field's tide is not a finite number: check the stations' constants",
                flagged: false,
            };
        }
        TideOutcome::Tide {
            zone,
            tide_m: tide,
            u,
            filled: None,
        }
    }
}

impl ContinuousSetup {
    /// The field station that gauge `g` is.
    #[inline]
    fn station_of(&self, g: usize) -> usize {
        self.blend_gauges
            .iter()
            .find(|(gg, _)| *gg == g)
            .map(|(_, i)| *i)
            .expect("a blended gauge is a station")
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
