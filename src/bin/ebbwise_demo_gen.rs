//! `ebbwise-demo-gen`: writes the bundled demo survey of the invented "Vellmar Water" estuary.
//!
//! ```text
//! cargo run --release --bin ebbwise-demo-gen -- zoning-demo
//! ```
//!
//! writes gauge records, a tidal zoning, two launches' soundings, the truth behind them and an
//! annotated project file into the given folder. All randomness comes from one fixed ChaCha8 seed
//! (one stream per output), so every run writes the same bytes. The binary uses no code from the
//! ebbwise library: the demo data are an independent check of it.
//!
//! Frame: the estuary is a straight-axis funnel in UTM zone 24S (EPSG:32724). A position is
//! `(along_m, across_m)`: metres along the axis from the mouth, and metres across it (positive to
//! the left looking up-estuary). `xi = along_m / LENGTH_M` runs from 0 at the mouth to 1 at the
//! head. Heights are positive up, depths positive down, times UTC.

#![forbid(unsafe_code)]

use std::f64::consts::TAU;
use std::fmt::Write as _;

use anyhow::{Context, Result};
use chrono::{SecondsFormat, TimeZone, Utc};
use geo::{Contains, Coord, LineString, Point, Polygon};
use proj::Proj;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use serde_json::{json, Value};

const SEED: u64 = 20_260_614;
const SURVEY_DAY: &str = "2026-06-14";
const UTM_CRS: &str = "EPSG:32724";
/// Mouth centre (axis at xi = 0), UTM 24S metres.
const MOUTH_E_M: f64 = 719_850.0;
const MOUTH_N_M: f64 = 4_727_120.0;
/// Direction of the axis from mouth to head, degrees clockwise from grid north.
const AXIS_AZIMUTH_DEG: f64 = 38.0;
const LENGTH_M: f64 = 20_000.0;

const M2_DEG_PER_H: f64 = 28.984_104_2;
const S2_DEG_PER_H: f64 = 30.0;
const M4_DEG_PER_H: f64 = 57.968_208_5;
/// (name, speed °/h, amplitude at mouth m, amplitude at head m, phase at mouth °), phases
/// relative to 2026-06-14T00:00Z.
const CONSTITUENTS: [(&str, f64, f64, f64, f64); 3] = [
    ("M2", M2_DEG_PER_H, 1.20, 1.62, 318.0),
    ("S2", S2_DEG_PER_H, 0.40, 0.54, 300.0),
    ("M4", M4_DEG_PER_H, 0.00, 0.06, 190.0),
];
const MEAN_LEVEL_MOUTH_M: f64 = 2.60;
const MEAN_LEVEL_RISE_M: f64 = 0.15;
const LAG_HEAD_MIN: f64 = 45.0;
const LAG_ACROSS_MIN_PER_KM: f64 = 1.0;
const SURGE_AMPLITUDE_M: f64 = 0.06;
const SURGE_PERIOD_H: f64 = 30.0;
const SURGE_ZERO_H: f64 = -4.0;

const SOUNDING_NOISE_SD_M: f64 = 0.05;
const GAUGE_NOISE_SD_M: f64 = 0.01;
const MIN_LOGGED_DEPTH_M: f64 = 0.30;
const SPEED_M_S: f64 = 3.0;
const PING_MS: i64 = 500;
/// Lines stop this far short of the shore.
const SHORE_MARGIN_M: f64 = 15.0;
/// The one overshooting line runs this far past the shore.
const OVERSHOOT_M: f64 = 100.0;
/// Seabed at the shore line (negative: dries), and its rise beyond, m per m.
const SHORE_DEPTH_M: f64 = -1.2;
const BEYOND_SHORE_SLOPE: f64 = 0.006;

/// Zone boundaries in xi, mouth to head.
const ZONE_EDGES_XI: [f64; 8] = [0.0, 0.14, 0.28, 0.42, 0.56, 0.70, 0.85, 1.0];

/// A tide gauge of the scenario.
struct GaugeSite {
    id: &'static str,
    name: &'static str,
    xi: f64,
    /// Across-axis position as a fraction of the half-width on its side (+ left).
    across_frac: f64,
    zero_above_datum_m: f64,
    step_min: i64,
}

const GAUGES: [GaugeSite; 3] = [
    GaugeSite {
        id: "orlick",
        name: "Orlick Point",
        xi: 0.06,
        across_frac: 0.85,
        zero_above_datum_m: -0.85,
        step_min: 6,
    },
    GaugeSite {
        id: "pendrath",
        name: "Pendrath Quay",
        xi: 0.49,
        across_frac: -0.85,
        zero_above_datum_m: -1.20,
        step_min: 1,
    },
    GaugeSite {
        id: "skellan",
        name: "Skellan Head",
        xi: 0.93,
        across_frac: 0.80,
        zero_above_datum_m: 0.35,
        step_min: 6,
    },
];
const PENDRATH: usize = 1;

/// A point where the authority's tide model supplies harmonic constants (a virtual gauge of the
/// co-tidal field): seaward of the mouth, or on the intertidal margin just beyond the shore line
/// (the zoning's edge), where the model's cells wet and dry.
struct VirtualSite {
    id: &'static str,
    name: &'static str,
    xi: f64,
    /// On the left shore (looking up-estuary), else the right.
    left: bool,
    /// Distance beyond the shore line at `xi`, metres.
    beyond_shore_m: f64,
}

impl VirtualSite {
    fn across_m(&self) -> f64 {
        let a = half_width_m(self.xi, self.left) + self.beyond_shore_m;
        if self.left {
            a
        } else {
            -a
        }
    }
    fn level_m(&self, t_ms: i64) -> f64 {
        tide_m(self.xi, self.across_m(), t_ms)
    }
}

/// The tide model's points, chosen so that the hull of the gauges and these points encloses
/// every zone by at least 200 m, with stations on both shores along the estuary so that the
/// triangles holding the zones span at most about 11 degrees of M2 phase. None lies more than
/// 500 m beyond the shore line: the land rises at `BEYOND_SHORE_SLOPE` from a drying height of
/// 1.2 m there (at most 4.2 m above chart datum at these points), so each is covered at high
/// water springs.
const VIRTUAL: [VirtualSite; 7] = [
    VirtualSite {
        id: "vm-mouth-se",
        name: "Vellmar model point, mouth south-east",
        xi: -0.01,
        left: false,
        beyond_shore_m: 300.0,
    },
    VirtualSite {
        id: "vm-mouth-nw",
        name: "Vellmar model point, mouth north-west",
        xi: -0.015,
        left: true,
        beyond_shore_m: 450.0,
    },
    VirtualSite {
        id: "vm-lower-se",
        name: "Vellmar model point, lower reach south-east",
        xi: 0.40,
        left: false,
        beyond_shore_m: 300.0,
    },
    VirtualSite {
        id: "vm-middle-nw",
        name: "Vellmar model point, middle reach north-west",
        xi: 0.51,
        left: true,
        beyond_shore_m: 350.0,
    },
    VirtualSite {
        id: "vm-upper-se",
        name: "Vellmar model point, upper reach south-east",
        xi: 0.835,
        left: false,
        beyond_shore_m: 500.0,
    },
    VirtualSite {
        id: "vm-head-se",
        name: "Vellmar model point, head south-east",
        xi: 1.01,
        left: false,
        beyond_shore_m: 400.0,
    },
    VirtualSite {
        id: "vm-head-nw",
        name: "Vellmar model point, head north-west",
        xi: 1.015,
        left: true,
        beyond_shore_m: 400.0,
    },
];
/// (zone id, feeding gauges, zone-mean form?) per xi band.
const ZONE_PLAN: [(&str, &[usize], bool); 7] = [
    ("VW1", &[0], false),
    ("VW2", &[0], true),
    ("VW3", &[0, 1], true),
    ("VW4", &[1], false),
    ("VW5", &[1], true),
    ("VW6", &[2], true),
    ("VW7", &[2], false),
];

// ---------------------------------------------------------------------------------------------
// Geometry

fn axis_unit() -> (f64, f64) {
    let a = AXIS_AZIMUTH_DEG.to_radians();
    (a.sin(), a.cos())
}

/// Estuary frame to UTM 24S (easting_m, northing_m).
fn frame_to_utm(along_m: f64, across_m: f64) -> (f64, f64) {
    let (ux, uy) = axis_unit();
    (
        MOUTH_E_M + along_m * ux - across_m * uy,
        MOUTH_N_M + along_m * uy + across_m * ux,
    )
}

fn funnel_m(xi: f64) -> f64 {
    600.0 + 2400.0 * (1.0 - xi.clamp(0.0, 1.0)).powf(1.6)
}

/// Distance from the axis to the shore on the left (`left`) or right side at `xi`, metres.
fn half_width_m(xi: f64, left: bool) -> f64 {
    if left {
        funnel_m(xi) * (1.0 + 0.06 * (TAU * 2.3 * xi).sin())
    } else {
        funnel_m(xi) * (1.0 + 0.05 * (TAU * 1.7 * xi + 0.4).cos())
    }
}

/// True seabed depth below chart datum (positive down; negative = drying height), metres.
fn seabed_depth_m(xi: f64, across_m: f64) -> f64 {
    let w = half_width_m(xi, across_m >= 0.0);
    let u = across_m.abs() / w;
    if u >= 1.0 {
        return SHORE_DEPTH_M - (across_m.abs() - w) * BEYOND_SHORE_SLOPE;
    }
    let axis_m = 4.0 + 14.0 * (1.0 - xi.clamp(0.0, 1.0)).powf(1.2);
    let channel = (1.0 - u * u).powf(1.4);
    let mut d = SHORE_DEPTH_M + (axis_m - SHORE_DEPTH_M) * channel;
    // A drying sand bank on the right side mid-estuary.
    let wr = half_width_m(xi, false);
    let ba = (xi * LENGTH_M - 12_400.0) / 900.0;
    let bc = (across_m + 0.45 * wr) / (0.18 * wr);
    d -= 6.5 * (-(ba * ba) - bc * bc).exp();
    // Low bedforms in the channel.
    d + 0.12 * channel * (TAU * xi * LENGTH_M / 140.0 + 1.3 * (TAU * across_m / 800.0).sin()).sin()
}

// ---------------------------------------------------------------------------------------------
// Tide field

fn mean_level_m(xi: f64) -> f64 {
    MEAN_LEVEL_MOUTH_M + MEAN_LEVEL_RISE_M * xi
}

/// Time of tide behind the mouth, minutes (positive: later).
fn lag_min(xi: f64, across_m: f64) -> f64 {
    LAG_HEAD_MIN * xi + LAG_ACROSS_MIN_PER_KM * across_m / 1000.0
}

fn amplitude_m(k: usize, xi: f64) -> f64 {
    let (_, _, mouth, head, _) = CONSTITUENTS[k];
    mouth + (head - mouth) * xi
}

/// True water level above chart datum at a place and UTC time (ms since the epoch), metres.
fn tide_m(xi: f64, across_m: f64, t_ms: i64) -> f64 {
    let h = (t_ms - epoch_ms()) as f64 / 3_600_000.0;
    let lag_h = lag_min(xi, across_m) / 60.0;
    let mut level =
        mean_level_m(xi) + SURGE_AMPLITUDE_M * (TAU * (h - SURGE_ZERO_H) / SURGE_PERIOD_H).sin();
    for (k, &(_, speed, _, _, phase)) in CONSTITUENTS.iter().enumerate() {
        level += amplitude_m(k, xi) * (speed * (h - lag_h) - phase).to_radians().cos();
    }
    level
}

fn epoch_ms() -> i64 {
    utc_ms(14, 0, 0, 0)
}

/// UTC milliseconds of June `day` 2026, `h:m:s`.
fn utc_ms(day: u32, h: u32, m: u32, s: u32) -> i64 {
    Utc.with_ymd_and_hms(2026, 6, day, h, m, s)
        .unwrap()
        .timestamp_millis()
}

fn rfc3339(t_ms: i64, millis: bool) -> String {
    let f = if millis {
        SecondsFormat::Millis
    } else {
        SecondsFormat::Secs
    };
    Utc.timestamp_millis_opt(t_ms)
        .unwrap()
        .to_rfc3339_opts(f, true)
}

/// Fixed decimals without a negative zero.
fn fixed(x: f64, decimals: usize) -> String {
    let p = 10f64.powi(decimals as i32);
    format!("{:.*}", decimals, (x * p).round() / p + 0.0)
}

/// `x` rounded to `decimals` decimal places (the nearest `f64`, so it prints cleanly).
fn round_dp(x: f64, decimals: i32) -> f64 {
    let p = 10f64.powi(decimals);
    (x * p).round() / p
}

// ---------------------------------------------------------------------------------------------
// Gauges and zones

impl GaugeSite {
    fn across_m(&self) -> f64 {
        self.across_frac * half_width_m(self.xi, self.across_frac >= 0.0)
    }
    fn level_m(&self, t_ms: i64) -> f64 {
        tide_m(self.xi, self.across_m(), t_ms)
    }
    /// Mean level at the gauge as written in the project file.
    fn mean_level_written_m(&self) -> f64 {
        round_dp(mean_level_m(self.xi), 2)
    }
}

/// One gauge's correctors for a zone, as written.
struct Feed {
    gauge: usize,
    weight: f64,
    time_corrector_min: f64,
    range_ratio: f64,
}

/// A zone: an xi band of the estuary with its correctors.
struct Zone {
    id: &'static str,
    xi0: f64,
    xi1: f64,
    centroid_xi: f64,
    centroid_across_m: f64,
    feeds: Vec<Feed>,
    mean_level_above_datum_m: Option<f64>,
    /// Exterior ring, (xi, across_m), closed, counter-clockwise.
    ring: Vec<(f64, f64)>,
    polygon_utm: Polygon<f64>,
}

impl Zone {
    /// Tide the zoning formula gives with error-free gauges, metres above chart datum.
    fn predicted_m(&self, t_ms: i64) -> f64 {
        let mut sum = 0.0;
        for f in &self.feeds {
            let g = &GAUGES[f.gauge];
            let h = g.level_m(t_ms - (f.time_corrector_min * 60_000.0).round() as i64);
            let anomaly = match self.mean_level_above_datum_m {
                Some(_) => h - g.mean_level_written_m(),
                None => h,
            };
            sum += f.weight * f.range_ratio * anomaly;
        }
        self.mean_level_above_datum_m.unwrap_or(0.0) + sum
    }
}

/// Points across the estuary at `xi`, right shore to left shore; shared by the two zones meeting
/// there so their common edge has the same vertices.
fn cross_edge(xi: f64) -> Vec<(f64, f64)> {
    let (wr, wl) = (half_width_m(xi, false), half_width_m(xi, true));
    let count = ((wl + wr) / 250.0).ceil() as usize;
    (0..=count)
        .map(|j| match j {
            0 => (xi, -wr),
            j if j == count => (xi, wl),
            j => (xi, -wr + (wl + wr) * j as f64 / count as f64),
        })
        .collect()
}

fn band_ring(xi0: f64, xi1: f64) -> Vec<(f64, f64)> {
    let m = ((xi1 - xi0) / 0.005).ceil() as usize;
    let xs: Vec<f64> = (0..=m)
        .map(|k| match k {
            0 => xi0,
            k if k == m => xi1,
            k => xi0 + (xi1 - xi0) * k as f64 / m as f64,
        })
        .collect();
    let mut ring: Vec<(f64, f64)> = xs.iter().map(|&x| (x, -half_width_m(x, false))).collect();
    ring.extend(cross_edge(xi1).into_iter().skip(1));
    ring.extend(xs.iter().rev().skip(1).map(|&x| (x, half_width_m(x, true))));
    ring.extend(cross_edge(xi0).into_iter().rev().skip(1));
    ring
}

/// Area centroid of the band [xi0, xi1], (xi, across_m).
fn band_centroid(xi0: f64, xi1: f64) -> (f64, f64) {
    let (mut area, mut sx, mut sy) = (0.0, 0.0, 0.0);
    for k in 0..2000 {
        let xi = xi0 + (xi1 - xi0) * (k as f64 + 0.5) / 2000.0;
        let (wl, wr) = (half_width_m(xi, true), half_width_m(xi, false));
        area += wl + wr;
        sx += xi * (wl + wr);
        sy += 0.5 * (wl - wr) * (wl + wr);
    }
    (sx / area, sy / area)
}

fn build_zones() -> Vec<Zone> {
    ZONE_PLAN
        .iter()
        .enumerate()
        .map(|(b, &(id, gauges, zone_mean))| {
            let (xi0, xi1) = (ZONE_EDGES_XI[b], ZONE_EDGES_XI[b + 1]);
            let (cx, ca) = band_centroid(xi0, xi1);
            // Linear weights by distance along the axis, in steps of 0.05.
            let weights_pct: Vec<i64> = match gauges {
                [_] => vec![100],
                [a, b] => {
                    let (xa, xb) = (GAUGES[*a].xi, GAUGES[*b].xi);
                    let wa = (((xb - cx) / (xb - xa)).clamp(0.0, 1.0) * 20.0).round() as i64 * 5;
                    vec![wa, 100 - wa]
                }
                _ => unreachable!("a zone here has one or two gauges"),
            };
            let feeds = gauges
                .iter()
                .zip(weights_pct)
                .map(|(&g, w)| {
                    let gs = &GAUGES[g];
                    Feed {
                        gauge: g,
                        weight: w as f64 / 100.0,
                        time_corrector_min: (lag_min(cx, ca) - lag_min(gs.xi, gs.across_m()))
                            .round(),
                        range_ratio: round_dp(amplitude_m(0, cx) / amplitude_m(0, gs.xi), 2),
                    }
                })
                .collect();
            let ring = band_ring(xi0, xi1);
            let utm: Vec<Coord<f64>> = ring
                .iter()
                .map(|&(xi, a)| {
                    let (x, y) = frame_to_utm(xi * LENGTH_M, a);
                    Coord { x, y }
                })
                .collect();
            Zone {
                id,
                xi0,
                xi1,
                centroid_xi: cx,
                centroid_across_m: ca,
                feeds,
                mean_level_above_datum_m: zone_mean.then(|| round_dp(mean_level_m(cx), 2)),
                ring,
                polygon_utm: Polygon::new(LineString::new(utm), vec![]),
            }
        })
        .collect()
}

// ---------------------------------------------------------------------------------------------
// Launches

/// One logged sounding with its truth.
#[derive(Clone)]
struct Ping {
    t_ms: i64,
    easting_m: f64,
    northing_m: f64,
    depth_m: f64,
    line: String,
    true_tide_m: f64,
    true_depth_m: f64,
    /// Index of the zone holding the sounding, `None` outside the zoning.
    zone: Option<usize>,
    /// Written as a corrupt row (a logger glitch).
    corrupt: bool,
}

struct LaunchPlan {
    letter: char,
    /// First and last line position along the axis, metres, in survey order.
    from_m: f64,
    to_m: f64,
    start_ms: i64,
    /// Line change (turn and run-in), ms.
    turn_ms: i64,
    stream: u64,
    /// The first line starting at or after this time overshoots the far shore.
    overshoot_after_ms: Option<i64>,
}

fn line_length_m(along_m: f64) -> f64 {
    let xi = along_m / LENGTH_M;
    half_width_m(xi, true) + half_width_m(xi, false) - 2.0 * SHORE_MARGIN_M
}

/// Line positions along the axis: as many equally spaced lines as fit the day.
fn line_positions(p: &LaunchPlan, end_ms: i64) -> Vec<f64> {
    let place = |count: usize| -> Vec<f64> {
        let step = (p.to_m - p.from_m) / count as f64;
        (0..count)
            .map(|k| p.from_m + step * (k as f64 + 0.5))
            .collect()
    };
    let duration_ms = |lines: &[f64]| -> i64 {
        lines
            .iter()
            .map(|&a| (line_length_m(a) / SPEED_M_S * 1000.0) as i64 + PING_MS + p.turn_ms)
            .sum()
    };
    let mut count = 1;
    while p.start_ms + duration_ms(&place(count + 1)) <= end_ms + p.turn_ms {
        count += 1;
    }
    place(count)
}

fn run_launch(p: &LaunchPlan, zones: &[Zone], end_ms: i64) -> Vec<Ping> {
    let mut rng = ChaCha8Rng::seed_from_u64(SEED);
    rng.set_stream(p.stream);
    let noise = Normal::new(0.0, SOUNDING_NOISE_SD_M).unwrap();
    let mut overshoot_pending = p.overshoot_after_ms.is_some();
    let mut t_ms = p.start_ms;
    let mut out = Vec::new();
    for (k, &along_m) in line_positions(p, end_ms).iter().enumerate() {
        let line = format!("{}-{:03}", p.letter, k + 1);
        let dir = if k % 2 == 0 { 1.0 } else { -1.0 }; // + : right shore to left shore
        let xi_line = along_m / LENGTH_M;
        let start_across = -dir * (half_width_m(xi_line, dir < 0.0) - SHORE_MARGIN_M);
        let mut end_across = dir * (half_width_m(xi_line, dir > 0.0) - SHORE_MARGIN_M);
        if overshoot_pending && t_ms >= p.overshoot_after_ms.unwrap_or(i64::MAX) {
            end_across += dir * (SHORE_MARGIN_M + OVERSHOOT_M);
            overshoot_pending = false;
        }
        let length_m = (end_across - start_across).abs();
        let wobble_phase = (k as f64 * 2.399) % TAU;
        let mut i = 0i64;
        loop {
            let run_m = i as f64 * SPEED_M_S * PING_MS as f64 / 1000.0;
            if run_m > length_m {
                break;
            }
            let t = t_ms + i * PING_MS;
            let across_m = start_across + dir * run_m;
            let a_m = along_m + 4.0 * (TAU * run_m / 600.0 + wobble_phase).sin();
            let xi = a_m / LENGTH_M;
            let true_tide_m = tide_m(xi, across_m, t);
            let true_depth_m = seabed_depth_m(xi, across_m);
            let depth_m = round_dp(true_depth_m + true_tide_m + noise.sample(&mut rng), 2);
            i += 1;
            if depth_m < MIN_LOGGED_DEPTH_M - 1e-9 {
                continue;
            }
            let (easting_m, northing_m) = frame_to_utm(a_m, across_m);
            let pt = Point::new(easting_m, northing_m);
            let zone = zones.iter().position(|z| z.polygon_utm.contains(&pt));
            out.push(Ping {
                t_ms: t,
                easting_m,
                northing_m,
                depth_m,
                line: line.clone(),
                true_tide_m,
                true_depth_m,
                zone,
                corrupt: false,
            });
        }
        t_ms += (i - 1) * PING_MS + p.turn_ms;
        if t_ms > end_ms {
            break;
        }
    }
    out
}

// ---------------------------------------------------------------------------------------------
// Output

fn gap_ms() -> (i64, i64) {
    (utc_ms(14, 13, 10, 0), utc_ms(14, 14, 0, 0))
}

fn empty_height_ms() -> [i64; 2] {
    [utc_ms(14, 10, 42, 0), utc_ms(14, 15, 26, 0)]
}

/// Skellan's sensor faults: a spike (+0.52 m at 09:48), a stuck float (the 11:24 reading
/// repeated until 12:48) and the 16:00 row written twice with different readings.
fn skellan_spike_ms() -> i64 {
    utc_ms(14, 9, 48, 0)
}
fn skellan_stuck_ms() -> (i64, i64) {
    (utc_ms(14, 11, 24, 0), utc_ms(14, 12, 48, 0))
}
fn skellan_duplicate_ms() -> i64 {
    utc_ms(14, 16, 0, 0)
}

/// Days of each gauge's history record, the weeks before the survey record, from which
/// `ebbwise analyse` derives the gauge's harmonic constants (gap filling predicts from them).
const HISTORY_DAYS: i64 = 60;
/// Step of the history records, minutes.
const HISTORY_STEP_MIN: i64 = 6;

/// A gauge's history: `HISTORY_DAYS` of clean readings at `HISTORY_STEP_MIN` up to the survey
/// record's start, from the same tide model and sensor noise.
fn history_csv(g: &GaugeSite, stream: u64) -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(SEED);
    rng.set_stream(stream);
    let noise = Normal::new(0.0, GAUGE_NOISE_SD_M).unwrap();
    let end = utc_ms(13, 22, 0, 0);
    let mut t = end - HISTORY_DAYS * 86_400_000;
    let mut s = String::from("time,height\n");
    while t < end {
        let reading = g.level_m(t) + noise.sample(&mut rng) - g.zero_above_datum_m;
        writeln!(s, "{},{}", rfc3339(t, false), fixed(reading, 3)).unwrap();
        t += HISTORY_STEP_MIN * 60_000;
    }
    s
}

/// The tide model's series at a virtual point: the span and step of the gauges' history
/// records, levels above chart datum (no gauge zero), with noise like a gauge's; `ebbwise
/// analyse` derives the point's constants from it. Each point has its own random stream.
fn virtual_history_csv(v: &VirtualSite, stream: u64) -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(SEED);
    rng.set_stream(stream);
    let noise = Normal::new(0.0, GAUGE_NOISE_SD_M).unwrap();
    let end = utc_ms(13, 22, 0, 0);
    let mut t = end - HISTORY_DAYS * 86_400_000;
    let mut s = String::from("time,height\n");
    while t < end {
        let level = v.level_m(t) + noise.sample(&mut rng);
        writeln!(s, "{},{}", rfc3339(t, false), fixed(level, 3)).unwrap();
        t += HISTORY_STEP_MIN * 60_000;
    }
    s
}

// ---------------------------------------------------------------------------------------------
// A short-term gauge and the control's long record (datum transfer)

/// A survey gauge installed up the estuary for a month; it feeds no zone. Its zero's height
/// above chart datum is what `ebbwise transfer` finds from a comparison with orlick.
const SHORT_TERM: GaugeSite = GaugeSite {
    id: "ferrisk",
    name: "Ferrisk Jetty",
    xi: 0.70,
    across_frac: -0.80,
    zero_above_datum_m: -0.62,
    step_min: 6,
};
/// The short-term record: 30 days from 2026-05-31T00:00Z, covering the survey day.
fn short_term_span_ms() -> (i64, i64) {
    (
        utc_ms(14, 0, 0, 0) - 14 * 86_400_000,
        utc_ms(14, 0, 0, 0) + 16 * 86_400_000,
    )
}
/// The control's long record: a year at 6 minutes (high and low waters need a step of a few
/// minutes; hourly values would miss them by centimetres), 2025-07-01T00:00Z to
/// 2026-07-01T00:00Z, from which `ebbwise datums` gives orlick's long-term datums. It covers the
/// short-term record, so it is also the control's record of the comparison.
fn long_span_ms() -> (i64, i64) {
    (
        Utc.with_ymd_and_hms(2025, 7, 1, 0, 0, 0)
            .unwrap()
            .timestamp_millis(),
        Utc.with_ymd_and_hms(2026, 7, 1, 0, 0, 0)
            .unwrap()
            .timestamp_millis(),
    )
}

/// Readings of `g` every `step_min` from `from_ms` (inclusive) to `to_ms` (exclusive), with the
/// sensor noise of the other gauges.
fn plain_record_csv(g: &GaugeSite, from_ms: i64, to_ms: i64, stream: u64) -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(SEED);
    rng.set_stream(stream);
    let noise = Normal::new(0.0, GAUGE_NOISE_SD_M).unwrap();
    let mut s = String::from("time,height\n");
    let mut t = from_ms;
    while t < to_ms {
        let reading = g.level_m(t) + noise.sample(&mut rng) - g.zero_above_datum_m;
        writeln!(s, "{},{}", rfc3339(t, false), fixed(reading, 3)).unwrap();
        t += g.step_min * 60_000;
    }
    s
}

/// Long-term tidal datums of the true (noise-free) level at `g` over `span`, metres above
/// chart datum: high and low waters are the local extremes of a 1-minute grid refined by the
/// parabola through three samples; tidal days of two M2 periods start where M2's phase at the
/// gauge is 90° (mid-tide, away from every high and low water); MHHW (MLLW) is the mean of each
/// day's highest high (lowest low) water; MSL the mean of the grid.
struct TrueDatums {
    msl_m: f64,
    mhw_m: f64,
    mlw_m: f64,
    mhhw_m: f64,
    mllw_m: f64,
}

fn true_datums(g: &GaugeSite, span: (i64, i64)) -> TrueDatums {
    let step = 60_000;
    let n = ((span.1 - span.0) / step) as usize;
    let h: Vec<f64> = (0..=n)
        .map(|i| g.level_m(span.0 + i as i64 * step))
        .collect();
    let msl_m = h.iter().sum::<f64>() / h.len() as f64;
    let day_ms = 2.0 * 360.0 / M2_DEG_PER_H * 3_600_000.0;
    // M2's argument at the gauge, degrees, at `t_ms`: speed·(hours − lag) − phase.
    let lag_h = lag_min(g.xi, g.across_m()) / 60.0;
    let arg = |t_ms: f64| {
        M2_DEG_PER_H * ((t_ms - epoch_ms() as f64) / 3_600_000.0 - lag_h) - CONSTITUENTS[0].4
    };
    let first =
        span.0 as f64 + (90.0 - arg(span.0 as f64)).rem_euclid(360.0) / M2_DEG_PER_H * 3_600_000.0;
    let days = ((span.1 as f64 - first) / day_ms).floor() as usize;
    let mut hw: Vec<Vec<f64>> = vec![Vec::new(); days];
    let mut lw: Vec<Vec<f64>> = vec![Vec::new(); days];
    for i in 1..n {
        let (a, b, c) = (h[i - 1], h[i], h[i + 1]);
        let high = b > a && b >= c;
        let low = b < a && b <= c;
        if !(high || low) {
            continue;
        }
        let den = a - 2.0 * b + c;
        let off = if den != 0.0 { 0.5 * (a - c) / den } else { 0.0 };
        let y = b - 0.25 * (a - c) * off;
        let t = span.0 as f64 + (i as f64 + off) * step as f64;
        if t < first {
            continue;
        }
        let d = ((t - first) / day_ms).floor() as usize;
        if d < days {
            if high {
                hw[d].push(y);
            } else {
                lw[d].push(y);
            }
        }
    }
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let all_hw: Vec<f64> = hw.iter().flatten().copied().collect();
    let all_lw: Vec<f64> = lw.iter().flatten().copied().collect();
    let hhw: Vec<f64> = hw
        .iter()
        .map(|d| d.iter().copied().fold(f64::NEG_INFINITY, f64::max))
        .collect();
    let llw: Vec<f64> = lw
        .iter()
        .map(|d| d.iter().copied().fold(f64::INFINITY, f64::min))
        .collect();
    TrueDatums {
        msl_m,
        mhw_m: mean(&all_hw),
        mlw_m: mean(&all_lw),
        mhhw_m: mean(&hhw),
        mllw_m: mean(&llw),
    }
}

/// The truth behind the short-term gauge (`truth/ferrisk.json`).
fn short_term_truth_json() -> Result<String> {
    let span = long_span_ms();
    let (s, c) = (
        true_datums(&SHORT_TERM, span),
        true_datums(&GAUGES[0], span),
    );
    let levels = |d: &TrueDatums| {
        json!({
            "msl_m": round_dp(d.msl_m, 4), "mhw_m": round_dp(d.mhw_m, 4), "mlw_m": round_dp(d.mlw_m, 4),
            "mhhw_m": round_dp(d.mhhw_m, 4), "mllw_m": round_dp(d.mllw_m, 4),
            "mn_m": round_dp(d.mhw_m - d.mlw_m, 4), "gt_m": round_dp(d.mhhw_m - d.mllw_m, 4),
        })
    };
    let (gt_s, gt_c) = (s.mhhw_m - s.mllw_m, c.mhhw_m - c.mllw_m);
    // Chart datum carried from orlick as the transfer carries it, heights above the demo's
    // chart datum (a level surface): below MLLW by orlick's separation scaled by the GT ratio
    // (range-ratio method), or by orlick's separation unscaled (direct method).
    let cd_ratio = s.mllw_m - c.mllw_m * gt_s / gt_c;
    let cd_direct = s.mllw_m - c.mllw_m;
    let z = SHORT_TERM.zero_above_datum_m;
    let (start, end) = short_term_span_ms();
    let (e, n) = frame_to_utm(SHORT_TERM.xi * LENGTH_M, SHORT_TERM.across_m());
    let doc = json!({
        "description": "Invented demonstration data (Vellmar Water). The short-term gauge ferrisk (Ferrisk Jetty), \
            recorded for 30 days around the survey day, and the long-term datums behind the transfer of its datum \
            from orlick. Levels in metres above the demo's chart datum, a level surface; long-term datums of the \
            true (noise-free) level over the span of gauges/orlick-year.csv. The tide-defined chart datum that a \
            datum transfer carries follows the tide (below MLLW by orlick's separation, scaled by the GT ratio in \
            the range-ratio method, unscaled in the direct method), so it differs from the level surface up the \
            estuary, where the range is larger and the mean level higher: the zero's height above each is given.",
        "gauge": {
            "id": SHORT_TERM.id, "name": SHORT_TERM.name, "xi": SHORT_TERM.xi,
            "across_m": round_dp(SHORT_TERM.across_m(), 2), "easting_m": round_dp(e, 2), "northing_m": round_dp(n, 2),
            "step_min": SHORT_TERM.step_min, "record": "gauges/ferrisk.csv",
            "record_start_utc": rfc3339(start, false), "record_end_before_utc": rfc3339(end, false),
        },
        "zero_above_level_chart_datum_m": z,
        "long_term_span_utc": [rfc3339(span.0, false), rfc3339(span.1, false)],
        "long_term_ferrisk": levels(&s),
        "long_term_orlick": levels(&c),
        "chart_datum_by_range_ratio_m": round_dp(cd_ratio, 4),
        "chart_datum_by_direct_level_m": round_dp(cd_direct, 4),
        "zero_above_datum_by_range_ratio_m": round_dp(z - cd_ratio, 4),
        "zero_above_datum_by_direct_level_m": round_dp(z - cd_direct, 4),
    });
    Ok(serde_json::to_string_pretty(&doc)? + "\n")
}

fn gauge_csv(g: &GaugeSite, stream: u64) -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(SEED);
    rng.set_stream(stream);
    let noise = Normal::new(0.0, GAUGE_NOISE_SD_M).unwrap();
    let (gap0, gap1) = gap_ms();
    let mut s = String::from("time,height\n");
    let mut t = utc_ms(13, 22, 0, 0);
    let (stuck0, stuck1) = skellan_stuck_ms();
    let mut stuck_reading = 0.0;
    while t <= utc_ms(15, 2, 0, 0) {
        let mut reading = g.level_m(t) + noise.sample(&mut rng) - g.zero_above_datum_m;
        let faulty = g.id == "pendrath";
        if g.id == "skellan" {
            if t == skellan_spike_ms() {
                reading += 0.52;
            }
            if t == stuck0 {
                stuck_reading = round_dp(reading, 3);
            } else if t > stuck0 && t <= stuck1 {
                reading = stuck_reading;
            }
            if t == skellan_duplicate_ms() {
                writeln!(s, "{},{}", rfc3339(t, false), fixed(reading + 0.004, 3)).unwrap();
            }
        }
        if faulty && empty_height_ms().contains(&t) {
            writeln!(s, "{},", rfc3339(t, false)).unwrap();
        } else if !(faulty && t > gap0 && t < gap1) {
            writeln!(s, "{},{}", rfc3339(t, false), fixed(reading, 3)).unwrap();
        }
        t += g.step_min * 60_000;
    }
    s
}

fn zoning_geojson(zones: &[Zone], to_geo: &Proj) -> Result<String> {
    let mut features = Vec::new();
    for z in zones {
        let mut ring = Vec::with_capacity(z.ring.len());
        for &(xi, a) in &z.ring {
            let (lon, lat) = to_geo.convert(frame_to_utm(xi * LENGTH_M, a))?;
            ring.push(json!([round_dp(lon, 8), round_dp(lat, 8)]));
        }
        let mut props = serde_json::Map::new();
        props.insert("zone".into(), json!(z.id));
        if let [f] = z.feeds.as_slice() {
            props.insert("gauge".into(), json!(GAUGES[f.gauge].id));
            props.insert(
                "time_corrector_min".into(),
                json!(f.time_corrector_min as i64),
            );
            props.insert("range_ratio".into(), json!(f.range_ratio));
        } else {
            let feeds: Vec<Value> = z.feeds.iter().map(|f| json!({
                "gauge": GAUGES[f.gauge].id, "weight": f.weight,
                "time_corrector_min": f.time_corrector_min as i64, "range_ratio": f.range_ratio,
            })).collect();
            props.insert("feeds".into(), Value::Array(feeds));
        }
        if let Some(m) = z.mean_level_above_datum_m {
            props.insert("mean_level_above_datum_m".into(), json!(m));
        }
        // Standard uncertainties of the zone's correctors (demo values): smaller where the zone
        // holds its gauge. VW7 gives none, to show the project's defaults being used.
        if z.id != "VW7" {
            let holds_gauge = z.mean_level_above_datum_m.is_none();
            let (u_dt, u_r, u_zone) = if holds_gauge {
                (3, 0.02, 0.05)
            } else {
                (6, 0.03, 0.08)
            };
            props.insert("u_time_corrector_min".into(), json!(u_dt));
            props.insert("u_range_ratio".into(), json!(u_r));
            props.insert("u_zone_m".into(), json!(u_zone));
        }
        features.push(json!({
            "type": "Feature",
            "properties": props,
            "geometry": { "type": "Polygon", "coordinates": [ring] },
        }));
    }
    let fc = json!({ "type": "FeatureCollection", "features": features });
    Ok(serde_json::to_string_pretty(&fc)? + "\n")
}

/// What one soundings file holds, for `generator.json` and the README.
struct FileStats {
    rows: usize,
    /// 1-based data rows written corrupt.
    corrupt_rows: Vec<usize>,
    /// Valid soundings outside every zone.
    outside: usize,
    /// Valid soundings in a pendrath-fed zone whose time minus that feed's time corrector falls
    /// strictly inside the pendrath gap.
    in_gap: usize,
    /// Valid soundings in a skellan-fed zone whose shifted time falls strictly between the
    /// samples around one of skellan's faulty readings (the spike, the stuck float), which QC
    /// sets aside and the reducer does not interpolate through.
    in_skellan_fault: usize,
    first_ms: i64,
    last_ms: i64,
}

fn file_stats(pings: &[Ping], zones: &[Zone]) -> FileStats {
    let (gap0, gap1) = gap_ms();
    let in_gap = |p: &Ping, z: usize| {
        zones[z].feeds.iter().any(|f| {
            let shifted = p.t_ms - (f.time_corrector_min * 60_000.0) as i64;
            f.gauge == PENDRATH && shifted > gap0 && shifted < gap1
        })
    };
    let step = 6 * 60_000;
    let blocked = [
        (skellan_spike_ms() - step, skellan_spike_ms() + step),
        (skellan_stuck_ms().0, skellan_stuck_ms().1 + step),
    ];
    let in_fault = |p: &Ping, z: usize| {
        zones[z].feeds.iter().any(|f| {
            let shifted = p.t_ms - (f.time_corrector_min * 60_000.0) as i64;
            GAUGES[f.gauge].id == "skellan"
                && blocked.iter().any(|&(a, b)| shifted > a && shifted < b)
        })
    };
    let valid = || pings.iter().filter(|p| !p.corrupt);
    FileStats {
        in_skellan_fault: valid()
            .filter(|p| p.zone.is_some_and(|z| in_fault(p, z) && !in_gap(p, z)))
            .count(),
        rows: pings.len(),
        corrupt_rows: (0..pings.len())
            .filter(|&i| pings[i].corrupt)
            .map(|i| i + 1)
            .collect(),
        outside: valid().filter(|p| p.zone.is_none()).count(),
        in_gap: valid()
            .filter(|p| p.zone.is_some_and(|z| in_gap(p, z)))
            .count(),
        first_ms: pings[0].t_ms,
        last_ms: pings[pings.len() - 1].t_ms,
    }
}

/// RMS and largest absolute difference, metres, between the zoning formula fed by error-free
/// gauges and the true tide, over valid soundings inside the zoning.
fn zoning_model_error_m(pings: &[Ping], zones: &[Zone]) -> (f64, f64) {
    let errors: Vec<f64> = pings
        .iter()
        .filter(|p| !p.corrupt)
        .filter_map(|p| p.zone.map(|z| zones[z].predicted_m(p.t_ms) - p.true_tide_m))
        .collect();
    let rms = (errors.iter().map(|e| e * e).sum::<f64>() / errors.len() as f64).sqrt();
    (rms, errors.iter().fold(0.0f64, |m, e| m.max(e.abs())))
}

fn launch_a_csv(pings: &[Ping]) -> String {
    let mut s = String::from("time,easting,northing,depth_m,line\n");
    for p in pings {
        let t = rfc3339(p.t_ms, true);
        writeln!(
            s,
            "{t},{:.2},{:.2},{:.2},{}",
            p.easting_m, p.northing_m, p.depth_m, p.line
        )
        .unwrap();
    }
    s
}

fn launch_b_txt(pings: &[Ping], to_geo: &Proj) -> Result<String> {
    let mut s = String::from("unix_s lon lat depth line\n");
    for p in pings {
        let (lon, lat) = to_geo.convert((p.easting_m, p.northing_m))?;
        let t = format!("{}.{:03}", p.t_ms.div_euclid(1000), p.t_ms.rem_euclid(1000));
        match (p.corrupt, p.depth_m.is_nan()) {
            (false, _) => writeln!(s, "{t} {lon:.7} {lat:.7} {:.2} {}", p.depth_m, p.line)?,
            (true, true) => writeln!(s, "{t} {lon:.7} {lat:.7} NaN {}", p.line)?,
            (true, false) => writeln!(s, "{t} {lon:.7} {lat:.7}")?,
        }
    }
    Ok(s)
}

fn truth_csv(pings: &[Ping]) -> String {
    let mut s = String::from("row,true_tide_m,true_depth_below_datum_m\n");
    for (i, p) in pings.iter().enumerate() {
        if p.corrupt {
            writeln!(s, "{},,", i + 1).unwrap();
        } else {
            writeln!(
                s,
                "{},{},{}",
                i + 1,
                fixed(p.true_tide_m, 4),
                fixed(p.true_depth_m, 4)
            )
            .unwrap();
        }
    }
    s
}

fn main() -> Result<()> {
    let dir = std::path::PathBuf::from(
        std::env::args()
            .nth(1)
            .unwrap_or_else(|| "zoning-demo".into()),
    );
    let to_geo =
        Proj::new_known_crs(UTM_CRS, "EPSG:4326", None).context("setting up UTM 24S -> WGS 84")?;
    let zones = build_zones();
    let end_ms = utc_ms(14, 16, 30, 0);
    let a = run_launch(
        &LaunchPlan {
            letter: 'A',
            from_m: 0.0,
            to_m: 0.5 * LENGTH_M,
            start_ms: utc_ms(14, 7, 30, 0) + 250,
            turn_ms: 360_000,
            stream: 10,
            overshoot_after_ms: Some(utc_ms(14, 10, 30, 0)),
        },
        &zones,
        end_ms,
    );
    let mut b = run_launch(
        &LaunchPlan {
            letter: 'B',
            from_m: LENGTH_M,
            to_m: 0.5 * LENGTH_M,
            start_ms: utc_ms(14, 7, 33, 40) + 750,
            turn_ms: 180_000,
            stream: 11,
            overshoot_after_ms: None,
        },
        &zones,
        end_ms,
    );
    // Two logger glitches in the middle of launch B: a NaN depth, then a truncated row.
    let glitches = [b.len() * 45 / 100, b.len() * 55 / 100];
    b[glitches[0]].depth_m = f64::NAN;
    for i in glitches {
        b[i].corrupt = true;
    }
    let gauge_lonlat: Vec<(f64, f64)> = GAUGES
        .iter()
        .map(|g| to_geo.convert(frame_to_utm(g.xi * LENGTH_M, g.across_m())))
        .collect::<Result<_, _>>()?;
    let virtual_lonlat: Vec<(f64, f64)> = VIRTUAL
        .iter()
        .map(|v| to_geo.convert(frame_to_utm(v.xi * LENGTH_M, v.across_m())))
        .collect::<Result<_, _>>()?;
    let stats = [file_stats(&a, &zones), file_stats(&b, &zones)];
    let all: Vec<Ping> = a.iter().chain(b.iter()).cloned().collect();
    let model_error = zoning_model_error_m(&all, &zones);

    let mut outputs: Vec<(String, String)> = GAUGES
        .iter()
        .enumerate()
        .map(|(k, g)| (format!("gauges/{}.csv", g.id), gauge_csv(g, 1 + k as u64)))
        .collect();
    outputs.extend(GAUGES.iter().enumerate().map(|(k, g)| {
        (
            format!("gauges/{}-history.csv", g.id),
            history_csv(g, 20 + k as u64),
        )
    }));
    outputs.extend([
        ("zoning.geojson".into(), zoning_geojson(&zones, &to_geo)?),
        ("soundings/launch-a.csv".into(), launch_a_csv(&a)),
        ("soundings/launch-b.txt".into(), launch_b_txt(&b, &to_geo)?),
        ("truth/launch-a.csv".into(), truth_csv(&a)),
        ("truth/launch-b.csv".into(), truth_csv(&b)),
        (
            "truth/generator.json".into(),
            generator_json(&zones, &gauge_lonlat, &virtual_lonlat, &stats, model_error)?,
        ),
        (
            "project.toml".into(),
            project_toml(&gauge_lonlat, &virtual_lonlat),
        ),
        (
            "gap-fill.toml".into(),
            gap_fill_toml(&project_toml(&gauge_lonlat, &virtual_lonlat)),
        ),
        (
            "continuous.toml".into(),
            continuous_toml(&gap_fill_toml(&project_toml(
                &gauge_lonlat,
                &virtual_lonlat,
            ))),
        ),
        (
            "README.md".into(),
            readme(&stats, model_error, &virtual_lonlat),
        ),
    ]);
    // The datum-transfer example: files of their own, so the survey's files stay as they are.
    let (st0, st1) = short_term_span_ms();
    let (ly0, ly1) = long_span_ms();
    outputs.extend([
        (
            "gauges/ferrisk.csv".into(),
            plain_record_csv(&SHORT_TERM, st0, st1, 30),
        ),
        (
            "gauges/orlick-year.csv".into(),
            plain_record_csv(&GAUGES[0], ly0, ly1, 31),
        ),
        ("truth/ferrisk.json".into(), short_term_truth_json()?),
    ]);
    // The tide model's series at the virtual gauges: files and random streams of their own.
    outputs.extend(VIRTUAL.iter().enumerate().map(|(k, v)| {
        (
            format!("tide-model/{}-history.csv", v.id),
            virtual_history_csv(v, 40 + k as u64),
        )
    }));
    for (rel, text) in &outputs {
        let path = dir.join(rel);
        std::fs::create_dir_all(path.parent().expect("a file in a folder"))?;
        std::fs::write(&path, text).with_context(|| format!("writing {}", path.display()))?;
        println!("{:>10}  {}", text.len(), path.display());
    }
    for (name, s) in ["launch-a", "launch-b"].iter().zip(&stats) {
        println!(
            "{name}: {} data rows ({} corrupt), {} outside the zoning, {} in the pendrath gap",
            s.rows,
            s.corrupt_rows.len(),
            s.outside,
            s.in_gap
        );
    }
    Ok(())
}

fn generator_json(
    zones: &[Zone],
    gauge_lonlat: &[(f64, f64)],
    virtual_lonlat: &[(f64, f64)],
    stats: &[FileStats; 2],
    model_error: (f64, f64),
) -> Result<String> {
    let constituents: Vec<Value> = CONSTITUENTS.iter().map(|&(name, speed, a0, a1, ph)| json!({
        "name": name, "speed_deg_per_h": speed, "amplitude_mouth_m": a0, "amplitude_head_m": a1, "phase_mouth_deg": ph,
    })).collect();
    let gauges: Vec<Value> = GAUGES.iter().zip(gauge_lonlat).map(|(g, &(lon, lat))| {
        let (e, n) = frame_to_utm(g.xi * LENGTH_M, g.across_m());
        json!({
            "id": g.id, "name": g.name, "xi": g.xi, "across_m": round_dp(g.across_m(), 2),
            "easting_m": round_dp(e, 2), "northing_m": round_dp(n, 2), "lon": round_dp(lon, 6), "lat": round_dp(lat, 6),
            "step_min": g.step_min, "zero_above_datum_m": g.zero_above_datum_m,
            "mean_level_above_datum_m": g.mean_level_written_m(),
        })
    }).collect();
    let virtual_gauges: Vec<Value> = VIRTUAL.iter().zip(virtual_lonlat).map(|(v, &(lon, lat))| {
        let (e, n) = frame_to_utm(v.xi * LENGTH_M, v.across_m());
        json!({
            "id": v.id, "name": v.name, "xi": v.xi, "across_m": round_dp(v.across_m(), 2),
            "beyond_shore_m": v.beyond_shore_m,
            "easting_m": round_dp(e, 2), "northing_m": round_dp(n, 2), "lon": round_dp(lon, 6), "lat": round_dp(lat, 6),
            "history_record": format!("tide-model/{}-history.csv", v.id),
            "constants": format!("tide-model/{}.constants.toml", v.id),
        })
    }).collect();
    let zone_info: Vec<Value> = zones.iter().map(|z| json!({
        "zone": z.id, "xi_from": z.xi0, "xi_to": z.xi1,
        "centroid_xi": round_dp(z.centroid_xi, 4), "centroid_across_m": round_dp(z.centroid_across_m, 1),
        "form": if z.mean_level_above_datum_m.is_some() { "zone_mean" } else { "scaled" },
    })).collect();
    let file = |s: &FileStats| {
        json!({
            "data_rows": s.rows, "corrupt_rows": s.corrupt_rows, "outside_zoning": s.outside,
            "in_pendrath_gap": s.in_gap, "in_skellan_fault": s.in_skellan_fault, "first_utc": rfc3339(s.first_ms, true), "last_utc": rfc3339(s.last_ms, true),
        })
    };
    let (gap0, gap1) = gap_ms();
    let doc = json!({
        "description": "Invented demonstration data (Vellmar Water). True level above chart datum: \
            M(xi) + sum_k A_k(xi) cos(w_k (t - lag) - phi_k) + surge(t); t in hours from epoch_utc; xi in [0, 1] \
            along the axis from mouth to head; across in metres, positive to the left looking up-estuary; \
            lag = lag_head_min xi + lag_across_min_per_km across_km minutes; M(xi) = mean_level_mouth_m + \
            mean_level_rise_to_head_m xi; A_k linear in xi from mouth to head; surge = surge_amplitude_m \
            sin(2 pi (t - surge_zero_h) / surge_period_h). Observed depth = true depth below chart datum + true \
            level + N(0, sounding_noise_sd_m), rounded to depth_rounding_m; shallower than min_logged_depth_m: \
            not logged. Gauge reading = true level + N(0, gauge_noise_sd_m) - zero_above_datum_m, rounded to \
            gauge_value_rounding_m.",
        "seed": SEED, "survey_day_utc": SURVEY_DAY, "epoch_utc": rfc3339(epoch_ms(), false), "projected_crs": UTM_CRS,
        "sounding_noise_sd_m": SOUNDING_NOISE_SD_M, "depth_rounding_m": 0.01, "min_logged_depth_m": MIN_LOGGED_DEPTH_M,
        "gauge_noise_sd_m": GAUGE_NOISE_SD_M, "gauge_value_rounding_m": 0.001,
        "tide_field": {
            "constituents": constituents,
            "mean_level_mouth_m": MEAN_LEVEL_MOUTH_M, "mean_level_rise_to_head_m": MEAN_LEVEL_RISE_M,
            "lag_head_min": LAG_HEAD_MIN, "lag_across_min_per_km": LAG_ACROSS_MIN_PER_KM,
            "surge_amplitude_m": SURGE_AMPLITUDE_M, "surge_period_h": SURGE_PERIOD_H, "surge_zero_h": SURGE_ZERO_H,
        },
        "estuary": {
            "mouth_centre_easting_m": MOUTH_E_M, "mouth_centre_northing_m": MOUTH_N_M,
            "axis_azimuth_deg": AXIS_AZIMUTH_DEG, "length_m": LENGTH_M,
            "seabed": "channel 18 m below chart datum at the mouth shoaling to 4 m at the head; shores dry 1.2 m; a drying bank mid-estuary",
        },
        "gauges": gauges,
        "virtual_gauges": virtual_gauges,
        "virtual_gauge_series": "the tide model's series at each virtual gauge: true level above chart datum + N(0, gauge_noise_sd_m), \
            rounded to gauge_value_rounding_m, every 6 min for the 60 days before 2026-06-13T22:00Z (the span of the gauges' history records)",
        "zones": zone_info,
        "pendrath_fault": {
            "last_sample_before_gap_utc": rfc3339(gap0, false), "first_sample_after_gap_utc": rfc3339(gap1, false),
            "empty_height_times_utc": empty_height_ms().map(|t| rfc3339(t, false)),
        },
        "skellan_faults": {
            "spike_utc": rfc3339(skellan_spike_ms(), false), "spike_m": 0.52,
            "stuck_from_utc": rfc3339(skellan_stuck_ms().0, false), "stuck_to_utc": rfc3339(skellan_stuck_ms().1, false),
            "duplicated_time_utc": rfc3339(skellan_duplicate_ms(), false),
        },
        "files": { "soundings/launch-a.csv": file(&stats[0]), "soundings/launch-b.txt": file(&stats[1]) },
        "counting_rules": "rows are 1-based data rows; in_skellan_fault counts valid soundings in a zone fed by skellan whose time minus the time corrector lies strictly between the samples around the spike or the stuck float; in_pendrath_gap counts valid soundings in a zone fed by pendrath \
            whose time minus that feed's time corrector falls strictly between the two samples bounding the gap",
        "zoning_model_error_m": {
            "note": "zoning formula fed by error-free gauges minus the true tide, over valid soundings inside the zoning",
            "rms": round_dp(model_error.0, 4), "max_abs": round_dp(model_error.1, 4),
        },
    });
    Ok(serde_json::to_string_pretty(&doc)? + "\n")
}

/// The demo project with gap filling: the main project, each gauge given the constants
/// `ebbwise analyse` derives from its history record, and a `[gap_fill]` table.
fn gap_fill_toml(project: &str) -> String {
    let mut s = String::from(
        "# The demo survey reduced with gap filling: project.toml, plus each gauge's harmonic\n\
         # constants (from `ebbwise analyse` on gauges/ID-history.csv, see README.md) and [gap_fill].\n",
    );
    let mut gauge = None;
    for line in project.lines() {
        if let Some(id) = line
            .strip_prefix("id = \"")
            .and_then(|r| r.strip_suffix('"'))
        {
            gauge = Some(id.to_string());
        }
        if line == "name = \"Vellmar Water demo survey, 2026-06-14\"" {
            s.push_str("name = \"Vellmar Water demo survey, 2026-06-14, gap-filled\"\n");
            continue;
        }
        s.push_str(line);
        s.push('\n');
        if line.starts_with("u_datum_m = ") {
            if let Some(id) = gauge.take() {
                writeln!(s, "constants = \"gauges/{id}.constants.toml\"").unwrap();
            }
        }
    }
    s.push_str(GAP_FILL_TABLE);
    s
}

/// gap-fill.toml reduced with a continuous tide between the gauges (`[tide_field]`).
fn continuous_toml(gap_fill: &str) -> String {
    let mut s = String::from(
        "# The demo survey reduced with a continuous tide between the gauges: gap-fill.toml, plus\n\
         # [tide_field] (docs/cotidal.md).\n",
    );
    for line in gap_fill.lines() {
        if line.starts_with("name = \"Vellmar Water demo survey, 2026-06-14, gap-filled\"") {
            s.push_str("name = \"Vellmar Water demo survey, 2026-06-14, continuous tide\"\n");
            continue;
        }
        s.push_str(line);
        s.push('\n');
    }
    s.push_str(TIDE_FIELD_TABLE);
    s
}

const TIDE_FIELD_TABLE: &str = r#"
# ---------------------------------------------------------------------------------------------
# A continuous tide (docs/cotidal.md): instead of the zones' correctors, each sounding's tide is
# carried from the three gauges by the co-tidal field of their constants and the virtual gauges:
# with mode = "corrector_field" every gauge's record is shifted and scaled by the time corrector
# and range ratio the field gives between the gauge and the sounding, and the records are blended
# by the gauges' triangulation; "astronomical_residual" predicts the tide from the constants
# interpolated at the sounding and adds the gauges' observed residuals, blended the same way. The
# zoning still bounds the survey area and names the zones the QA report groups soundings by.
[tide_field]
mode = "corrector_field"
# Standard uncertainties of the field (demo values; the authority's specification sets them):
u_field_m = 0.05               # the field's departure from linear midway between two stations
field_scale_km = 10            # ... that stand this far apart
u_station_range_ratio = 0.02   # a station's relative amplitude error
u_station_time_min = 3         # a station's phase error, minutes of M2
"#;

const GAP_FILL_TABLE: &str = r#"
# ---------------------------------------------------------------------------------------------
# Gap filling (docs/gap-filling.md). Pendrath's 50-minute gap and the samples QC set aside at
# Skellan (a spike, a stuck float) are filled from each gauge's prediction plus its residual, or
# from a neighbouring gauge through the zoning, whichever matches the gap's edges best; the
# soundings reduced through them get status gap_filled, with an uncertainty measured by filling
# gaps of the same length cut out of the record. Gaps longer than max_fill_min stay open.
[gap_fill]
enabled = true
max_fill_min = 180
method = "auto"
# methods = { skellan = "prediction_residual" }   # per gauge: auto, prediction_residual,
#                                                 # neighbour or none
renormalise_feeds = true   # a two-gauge zone with one feed missing uses the other
"#;

const VIRTUAL_GAUGE_NOTE: &str = r#"
# ---------------------------------------------------------------------------------------------
# Virtual gauges: harmonic constants at points where no gauge stands, supplied by the authority's
# tide model (docs/cotidal.md). They do not change the discrete reduction: `ebbwise zones derive`
# and `ebbwise zones compare` build the co-tidal field from them and from the gauges that name
# `constants` (gap-fill.toml names them). The three gauges alone span one thin triangle and
# every zone reaches kilometres outside it; with these seven points, two off the mouth, two at
# the head and three on the intertidal margin along the shores, the field's hull encloses every
# zone. Each constants file holds levels above chart datum (`levels = "above chart datum"`): a
# virtual gauge has no zero of its own.
#
#   constants  the point's constants file (ebbwise-harmonic-constants/1), relative to this file
"#;

fn project_toml(gauge_lonlat: &[(f64, f64)], virtual_lonlat: &[(f64, f64)]) -> String {
    let mut s = String::from(
        r#"# ebbwise project file for the bundled demo survey "Vellmar Water".
# INVENTED DATA for demonstration only: the estuary, gauges and survey do not exist.
# Written by `cargo run --release --bin ebbwise-demo-gen -- zoning-demo`; edit the generator, not this file.
#
# Conventions used throughout ebbwise:
#   * heights are positive UP, depths positive DOWN, both in metres;
#   * chart datum (CD) is the vertical reference of the results: a reduced depth is the depth of the
#     seabed below CD, and a negative reduced depth is a drying height (seabed above CD);
#   * times are UTC; a time written without an offset is an error unless
#     naive_time_utc_offset says how to read it (not needed here: every time carries "Z");
#   * paths are relative to this file.
# Keys are checked: a misspelt key is an error, never silently ignored.

name = "Vellmar Water demo survey, 2026-06-14"

# The tidal zoning: GeoJSON polygons in WGS 84 [longitude, latitude]. Each zone names the gauge(s)
# feeding it, a time corrector (minutes, positive: the tide arrives later in the zone than at the
# gauge) and a range ratio (zone range / gauge range). Zones that also give
# mean_level_above_datum_m use the zone-mean form, the others the scaled form.
zoning = "zoning.geojson"

[output]
# Results are written here (created when missing).
dir = "out"

# ---------------------------------------------------------------------------------------------
# Tide gauges. Each record is a CSV file with a header "time,height": RFC 3339 UTC times and
# heights above the gauge's own zero (the zero of its staff or sensor), in `units`.
#
#   zero_above_datum_m        height of the gauge zero above chart datum, metres; negative when the
#                             zero lies below chart datum. level above CD = reading + this value.
#   mean_level_above_datum_m  mean water level at the gauge above chart datum, metres (used by the
#                             zone-mean form of the zoning).
#   max_gap_min               longest gap between samples that interpolation may bridge; soundings
#                             whose (time-corrected) time falls in a longer gap get no tide.
#   u_gauge_m                 standard uncertainty (1 sigma) of the level from the sensor; ebbwise
#                             adds the error of interpolating between samples from the record.
#   u_datum_m                 standard uncertainty (1 sigma) of chart datum carried by the gauge
#                             (levelling, datum determination, transfer).
"#,
    );
    let notes = [
        "# Near the mouth. Six-minute record.",
        "# Mid-estuary. One-minute record with faults: no samples between 13:10 and 14:00 UTC\n\
         # (a 50-minute gap, longer than max_gap_min) and two empty readings.\n\
         # Example: a reading of 5.650 (metres above the gauge zero) means a level of\n\
         # 5.650 + (-1.20) = 4.450 m above chart datum.",
        "# Near the head. Six-minute record; its zero lies above chart datum.",
    ];
    for ((g, &(lon, lat)), note) in GAUGES.iter().zip(gauge_lonlat).zip(notes) {
        write!(
            s,
            "\n{note}\n[[gauge]]\nid = \"{}\"\nname = \"{}\"\nlon = {lon:.6}\nlat = {lat:.6}\n\
             record = \"gauges/{}.csv\"\nunits = \"m\"\nzero_above_datum_m = {:.2}\n\
             mean_level_above_datum_m = {:.2}\nmax_gap_min = 30\n\
             u_gauge_m = {:.3}\nu_datum_m = {:.2}\n",
            g.id,
            g.name,
            g.id,
            g.zero_above_datum_m,
            g.mean_level_written_m(),
            if g.step_min == 1 { 0.012 } else { 0.015 },
            0.03 + 0.01 * (g.zero_above_datum_m > 0.0) as u8 as f64,
        )
        .unwrap();
    }
    s.push_str(VIRTUAL_GAUGE_NOTE);
    for (v, &(lon, lat)) in VIRTUAL.iter().zip(virtual_lonlat) {
        write!(
            s,
            "\n[[virtual_gauge]]\nid = \"{}\"\nname = \"{}\"\nlon = {lon:.6}\nlat = {lat:.6}\n\
             constants = \"tide-model/{}.constants.toml\"\n",
            v.id, v.name, v.id,
        )
        .unwrap();
    }
    s.push_str(
        r##"
# ---------------------------------------------------------------------------------------------
# Soundings: observed depths below the instantaneous water surface (positive down), one group of
# files per layout. `columns` maps each quantity to a header name (or "#N" for the N-th column).

# Launch A, lower estuary: comma-separated, UTM zone 24S eastings/northings, ISO 8601 UTC times.
[[soundings]]
files = ["soundings/launch-a.csv"]
crs = "EPSG:32724"
delimiter = "comma"
time_format = "iso8601"
columns = { time = "time", x = "easting", y = "northing", depth = "depth_m", line = "line" }

# Launch B, upper estuary: whitespace-separated, WGS 84 longitude/latitude (x = longitude,
# y = latitude), Unix seconds. The logger glitched on two rows (a NaN depth, a truncated row).
[[soundings]]
files = ["soundings/launch-b.txt"]
crs = "EPSG:4326"
delimiter = "whitespace"
time_format = "unix_s"
columns = { time = "unix_s", x = "lon", y = "lat", depth = "depth", line = "line" }

# ---------------------------------------------------------------------------------------------
# Gauge-record quality control runs on every record before use, with the defaults of docs/qc.md
# (from memory / common practice: set them from your specification). The reducer never
# interpolates across a flagged sample. Skellan's record has its 16:00 row written twice with
# different readings: no rule can tell which is right, so the record would be refused; this
# project chooses to set both copies aside instead. Uncomment to change a threshold, e.g.:
[qc]
duplicate_time_conflict = "set_both_aside"
# spike_k = 6                  # spike threshold, robust standard deviations
# flat_min_duration_min = 60   # a reading repeated this long is a stuck sensor (set: no
#                              # stand at a turning point is excused)
# max_rate_m_per_h = 3.0       # fastest plausible change of level (absent: from each record)
# [interpolation]
# cubic_above_step_min = 10    # records sparser than this use a not-a-knot cubic spline

# ---------------------------------------------------------------------------------------------
# Uncertainty (GUM, standard uncertainties = 1 sigma) and the survey order the soundings are
# judged against (IHO S-44 Edition 6.1.0: exclusive, special, 1a, 1b, 2, or a custom order).
# Every number here is a DEMO VALUE chosen to look typical: a real survey takes them from its
# specification. Zones give their own corrector uncertainties in the zoning (u_time_corrector_min,
# u_range_ratio, u_zone_m); zone VW7 gives none and so uses the defaults below.
[uncertainty]
order = "special"
acceptance_share = 0.95
# Sounding uncertainty model, standard: u = sqrt(a^2 + (b * depth)^2)
sounding_a_m = 0.05
sounding_b = 0.003
default_u_gauge_m = 0.015
default_u_datum_m = 0.04
default_u_time_corrector_min = 10
default_u_range_ratio = 0.03
default_u_zone_m = 0.10

# A user-defined order, judged beside the built-in ones (allowed U95 = sqrt(a^2 + (b d)^2)).
[[uncertainty.custom_order]]
name = "harbour-dredged"
a_m = 0.20
b = 0.005
"##,
    );
    s
}

fn readme(
    stats: &[FileStats; 2],
    model_error: (f64, f64),
    virtual_lonlat: &[(f64, f64)],
) -> String {
    let virtual_rows: String = VIRTUAL
        .iter()
        .zip(virtual_lonlat)
        .map(|(v, &(lon, lat))| {
            format!(
                "| `{}` | {} | {:.3} | {:.0} m {} | {:.0} m | {lon:.4} | {lat:.4} |\n",
                v.id,
                v.name,
                v.xi,
                v.across_m().abs(),
                if v.left { "NW" } else { "SE" },
                v.beyond_shore_m,
            )
        })
        .collect();
    let virtual_ids: String = VIRTUAL.iter().map(|v| v.id).collect::<Vec<_>>().join(" ");
    let gauges: String = GAUGES
        .iter()
        .map(|g| {
            format!(
                "| `{}` | {} | {} min | {:+.2} m | {:.2} m |\n",
                g.id,
                g.name,
                g.step_min,
                g.zero_above_datum_m,
                g.mean_level_written_m()
            )
        })
        .collect();
    let [a, b] = stats;
    format!(
        r#"# Vellmar Water: the ebbwise demo survey

**Invented data for demonstration only.** Vellmar Water, Orlick Point, Pendrath Quay and Skellan
Head do not exist. The estuary is placed in open water near 36.0° W, 47.5° S (UTM zone 24S,
EPSG:32724) only so that real coordinate conversions are exercised. Not for navigation.

## Scenario

A funnel-shaped estuary 20 km long, about 6 km wide at the mouth (south-west) narrowing to about
1.2 km at the head (north-east). The tide grows and comes later on its way up: M2 amplitude
1.20 m at the mouth rising 35 % to the head, S2 0.40 m likewise, a small M4 overtide growing from
0 to 0.06 m, high water about 45 min later at the head than at the mouth, mean level 2.60 m above
chart datum at the mouth rising 0.15 m to the head, and a slow common surge of ±0.06 m. The
channel is about 18 m deep at the mouth and 4 m at the head; the shores and a mid-estuary bank
dry at low water.

On {day} two launches ran cross-estuary lines between about 07:30 and 16:30 UTC at 3 m/s, one
sounding every 0.5 s: launch A in the lower half, launch B in the upper half. Soundings
shallower than {min:.1} m were not logged.

| gauge | name | sampling | zero above chart datum | mean level above chart datum |
|---|---|---|---|---|
{gauges}
## Files

| file | content |
|---|---|
| `project.toml` | the annotated project file: start here |
| `zoning.geojson` | 7 zones VW1–VW7 (WGS 84); VW3 is fed by orlick and pendrath together |
| `gauges/*.csv` | gauge records `time,height` above each gauge's zero, 2026-06-13T22:00Z to 2026-06-15T02:00Z |
| `tide-model/*-history.csv`, `tide-model/*.constants.toml` | the tide model's 60-day series at each virtual gauge (levels above chart datum) and the constants analysed from it |
| `soundings/launch-a.csv` | launch A: {rows_a} soundings; comma-separated, UTM 24S, ISO 8601 times |
| `soundings/launch-b.txt` | launch B: {rows_b} rows; whitespace-separated, lon/lat, Unix seconds |
| `truth/launch-a.csv`, `truth/launch-b.csv` | true tide and true depth below chart datum, one row per data row |
| `truth/generator.json` | the generator's parameters and the counts below |

The responsible authority's tide model supplies harmonic constants at seven open points, the
project's virtual gauges (`[[virtual_gauge]]`), for the co-tidal field of `ebbwise zones`
(docs/cotidal.md): two off the mouth, two at the head and three on the intertidal margin just
beyond the shore line (covered at high water springs). With the three gauges they make a hull
that encloses every zone by at least 200 m, where the gauges alone span one thin triangle that
every zone reaches kilometres outside. They do not change the discrete reduction.

| virtual gauge | name | xi (0 mouth, 1 head) | from the axis | beyond the shore | lon | lat |
|---|---|---|---|---|---|---|
{virtual_rows}
Deliberate faults, as real surveys have them:

* `pendrath` has no samples between 13:10 and 14:00 UTC (a 50-minute gap, longer than the
  30 minutes interpolation may bridge) and two empty readings; {gap_a} soundings of launch A and
  {gap_b} of launch B lie in zones it feeds at times that fall in the gap;
* `skellan`'s sensor misbehaves three times: a spike of +0.52 m at 09:48, a stuck float
  (the 11:24 reading repeated until 12:48) and the 16:00 row written twice with different
  readings (the project sets both copies aside). `ebbwise qc` finds
  each; the reducer does not interpolate across the flagged samples, so {flt_a} soundings of
  launch A and {flt_b} of launch B, in zones skellan feeds, get status `gauge_flagged`;
* one line of launch A overshoots the shore by 100 m: {out} soundings lie outside every zone;
* launch B has two corrupt rows (data rows {c0}: `NaN` depth, and {c1}: truncated).

## How it was generated

```text
cargo run --release --bin ebbwise-demo-gen -- zoning-demo
for g in orlick:-0.85 pendrath:-1.20 skellan:0.35; do
  cargo run --release --bin ebbwise -- analyse zoning-demo/gauges/${{g%%:*}}-history.csv \
    --zero-above-datum-m=${{g#*:}} --out zoning-demo/gauges/${{g%%:*}}.constants.toml
done
for v in {virtual_ids}; do
  cargo run --release --bin ebbwise -- analyse zoning-demo/tide-model/$v-history.csv \
    --zero-above-datum-m=0 --out zoning-demo/tide-model/$v.constants.toml
done
```

The second step writes each gauge's harmonic constants from its 60-day history record
(`gauges/ID-history.csv`, the weeks before the survey, same tide and noise), which gap filling
predicts from. The third writes each virtual gauge's constants from the tide model's series at
the point (`tide-model/ID-history.csv`: the true level above chart datum over the same 60 days
with the gauges' noise; `--zero-above-datum-m=0` because its levels are already above chart
datum, so the constants say `levels = "above chart datum"`, as a virtual gauge's must).
The generator (`src/bin/ebbwise_demo_gen.rs`) is deterministic (ChaCha8, seed {seed}): running it
again rewrites the same bytes. Noise: sounding depths N(0, {sd_s:.2} m), rounded to 0.01 m; gauge
readings N(0, {sd_g:.2} m), rounded to 0.001 m. Each zone's correctors come from the true tide at
its centroid (time corrector rounded to 1 min, range ratio to 0.01), so the zoning is good but not
exact: fed by error-free gauges it differs from the true tide by {rms:.3} m rms and at most
{max:.3} m over the soundings inside the zoning.

## Running it

`ebbwise check zoning-demo/project.toml` lists the faults above; `ebbwise reduce
zoning-demo/project.toml` reduces the survey into `zoning-demo/out/`. The `run` script here builds
ebbwise and does the same through `ebbwise demo`. `ebbwise zones compare --project
zoning-demo/gap-fill.toml` sets the zoning's correctors beside those of the co-tidal field of the
gauges and the virtual gauges (gap-fill.toml names the gauges' constants; project.toml does not,
so its field has the virtual gauges alone and derives no zone's correctors).
`ebbwise reduce zoning-demo/continuous.toml` reduces the same survey with a continuous tide
between the gauges (`[tide_field]`, docs/cotidal.md): the tide is carried from the three gauges
by the co-tidal field instead of stepping at the zones' edges.
"#,
        day = SURVEY_DAY,
        min = MIN_LOGGED_DEPTH_M,
        rows_a = a.rows,
        rows_b = b.rows,
        gap_a = a.in_gap,
        gap_b = b.in_gap,
        flt_a = a.in_skellan_fault,
        flt_b = b.in_skellan_fault,
        out = a.outside + b.outside,
        c0 = b.corrupt_rows[0],
        c1 = b.corrupt_rows[1],
        seed = SEED,
        sd_s = SOUNDING_NOISE_SD_M,
        sd_g = GAUGE_NOISE_SD_M,
        rms = model_error.0,
        max = model_error.1,
    )
}
