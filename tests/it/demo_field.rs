//! The demo's co-tidal field (`zoning-demo/gap-fill.toml`: the three gauges' constants and the
//! seven virtual gauges of the authority's tide model) against the generator's true tide, at a
//! grid of points inside every zone.
//!
//! **Truth.** The generator's M2 (truth/generator.json, `tide_field`): amplitude
//! `A(xi) = A_mouth + (A_head − A_mouth)·xi`, linear in position, and Greenwich-style phase lag
//! `G = G_mouth + ω·lag`, `lag = lag_head·xi + lag_across·across_km` minutes, linear in position
//! too. As a complex number `Z = A·e^{−iG}`.
//!
//! **The analysis' common factor.** Each station's constants come from `ebbwise analyse` on 60
//! days of the same tide model with independent noise; the nodal factor f and the astronomical
//! argument V₀ + u are the same for every station (same span, same constituent), so the analysed
//! M2 is `c·Z` with one complex `c` for all. The test estimates `c` as the mean over the ten
//! stations of `Z_analysed / Z_true` and compares `Z_field / c` with `Z_true`.
//!
//! **Noise allowance** (`NOISE_M`, 1 mm on the complex value). Gauge-like noise N(0, 0.01 m) on
//! N = 14 400 samples gives each M2 component a least-squares standard error of
//! σ·√(2/N) = 1.2e-4 m (common practice for the least-squares fit of a sinusoid); the field at a
//! point is a convex combination of three stations' errors, and `c`'s error is a mean of ten, so
//! 1 mm is more than 5 standard errors of the modulus of the complex error. The systematic parts
//! of the analysis (nodal factors, inferred constituents, the surge's off-frequency leakage:
//! 0.06 m at 12°/h against M2 over 60 days is below 0.06 m/213 = 0.3 mm) act alike on every
//! station and are mostly taken up by `c`. The allowance is checked at the ten stations
//! themselves, where interpolation adds nothing. In phase it is `asin(NOISE_M / A)`: below
//! 0.05°, 0.1 min.
//!
//! **Interpolation bound** (derived here). Inside a triangle with barycentric weights `w_i`
//! (non-negative, summing to one), the field is `Σ w_i Z_i`. Because `A` and `G` are linear,
//! `A(P) = Σ w_i A_i` and `G(P) = Σ w_i G_i`; let `δ_i = G_i − G(P)` and `Δφ` the range of the
//! three vertices' true phases (so `|δ_i| ≤ Δφ`, and the weighted variance of `δ` is at most
//! `Δφ²/4`, Popoviciu's inequality).
//! * Amplitude: `|Σ w_i Z_i| ≤ Σ w_i A_i = A(P)` (triangle inequality) and
//!   `|Σ w_i Z_i| ≥ Σ w_i A_i cos δ_i` (projection on `e^{−iG(P)}`), so the modulus falls short
//!   of the truth by between 0 and `Σ w_i A_i (1 − cos δ_i) ≤ A_max·Δφ²/8`, the
//!   `A·(1 − cos(Δφ/2))` of an edge's midpoint to leading order.
//! * Phase: the error `ε` has `tan ε = Σ w_i A_i sin δ_i / Σ w_i A_i cos δ_i`; with
//!   `Σ w_i A(P) δ_i = 0` the numerator is at most
//!   `|Σ w_i (A_i − A(P)) δ_i| + A_max Δφ³/6 ≤ ΔA·Δφ/4 + A_max Δφ³/6` (Cauchy–Schwarz and
//!   Popoviciu again, `ΔA` the vertices' amplitude range) and the denominator at least
//!   `A_min cos Δφ`.
//!
//! Each point's bound uses its own triangle (the field's weights) and the stations' true values
//! from generator.json; every point must lie inside the hull.

use std::f64::consts::PI;

use ebbwise::io::crs::Transformer;
use ebbwise::io::project::Project;
use ebbwise::run::fields::{project_field, zoning_of};
use geo::{BoundingRect, Contains};
use serde_json::Value;

use super::repo;

/// Allowance for the analysis' noise on the complex M2 value, metres (module doc).
const NOISE_M: f64 = 0.001;
/// Grid step of the points inside each zone, metres.
const GRID_M: f64 = 400.0;

/// A complex number, enough of one for phasors.
#[derive(Debug, Clone, Copy)]
struct Complex64 {
    re: f64,
    im: f64,
}

impl Complex64 {
    fn from_polar(r: f64, theta: f64) -> Self {
        Complex64 {
            re: r * theta.cos(),
            im: r * theta.sin(),
        }
    }
    fn norm(self) -> f64 {
        self.re.hypot(self.im)
    }
    fn arg(self) -> f64 {
        self.im.atan2(self.re)
    }
}

impl std::ops::Sub for Complex64 {
    type Output = Self;
    fn sub(self, o: Self) -> Self {
        Complex64 {
            re: self.re - o.re,
            im: self.im - o.im,
        }
    }
}

impl std::ops::Div for Complex64 {
    type Output = Self;
    fn div(self, o: Self) -> Self {
        let d = o.re * o.re + o.im * o.im;
        Complex64 {
            re: (self.re * o.re + self.im * o.im) / d,
            im: (self.im * o.re - self.re * o.im) / d,
        }
    }
}

impl std::ops::Div<f64> for Complex64 {
    type Output = Self;
    fn div(self, d: f64) -> Self {
        Complex64 {
            re: self.re / d,
            im: self.im / d,
        }
    }
}

impl std::iter::Sum for Complex64 {
    fn sum<I: Iterator<Item = Self>>(it: I) -> Self {
        it.fold(Complex64 { re: 0.0, im: 0.0 }, |a, b| Complex64 {
            re: a.re + b.re,
            im: a.im + b.im,
        })
    }
}

/// The generator's true M2 and its frame.
struct Truth {
    a_mouth_m: f64,
    a_head_m: f64,
    g_mouth_deg: f64,
    speed_deg_per_h: f64,
    lag_head_min: f64,
    lag_across_min_per_km: f64,
    mouth_e_m: f64,
    mouth_n_m: f64,
    azimuth_deg: f64,
    length_m: f64,
}

impl Truth {
    fn read(g: &Value) -> Truth {
        let tf = &g["tide_field"];
        let m2 = tf["constituents"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["name"] == "M2")
            .expect("M2 in the generator's tide field");
        let f = |v: &Value| v.as_f64().unwrap();
        let e = &g["estuary"];
        Truth {
            a_mouth_m: f(&m2["amplitude_mouth_m"]),
            a_head_m: f(&m2["amplitude_head_m"]),
            g_mouth_deg: f(&m2["phase_mouth_deg"]),
            speed_deg_per_h: f(&m2["speed_deg_per_h"]),
            lag_head_min: f(&tf["lag_head_min"]),
            lag_across_min_per_km: f(&tf["lag_across_min_per_km"]),
            mouth_e_m: f(&e["mouth_centre_easting_m"]),
            mouth_n_m: f(&e["mouth_centre_northing_m"]),
            azimuth_deg: f(&e["axis_azimuth_deg"]),
            length_m: f(&e["length_m"]),
        }
    }
    fn amplitude_m(&self, xi: f64) -> f64 {
        self.a_mouth_m + (self.a_head_m - self.a_mouth_m) * xi
    }
    fn lag_min(&self, xi: f64, across_m: f64) -> f64 {
        self.lag_head_min * xi + self.lag_across_min_per_km * across_m / 1000.0
    }
    fn phase_deg(&self, xi: f64, across_m: f64) -> f64 {
        self.g_mouth_deg + self.speed_deg_per_h * self.lag_min(xi, across_m) / 60.0
    }
    fn z(&self, xi: f64, across_m: f64) -> Complex64 {
        Complex64::from_polar(
            self.amplitude_m(xi),
            -self.phase_deg(xi, across_m).to_radians(),
        )
    }
    /// UTM 24S easting/northing to (xi, across_m) of the estuary frame.
    fn frame(&self, e_m: f64, n_m: f64) -> (f64, f64) {
        let a = self.azimuth_deg.to_radians();
        let (ux, uy) = (a.sin(), a.cos());
        let (de, dn) = (e_m - self.mouth_e_m, n_m - self.mouth_n_m);
        ((de * ux + dn * uy) / self.length_m, -de * uy + dn * ux)
    }
}

fn m2(k: &ebbwise::compute::harmonic::HarmonicConstants) -> Complex64 {
    let (_, h, g) = k
        .constituents
        .iter()
        .find(|c| c.0.name == "M2")
        .expect("M2 in the constants");
    Complex64::from_polar(*h, -g.to_radians())
}

/// Phase of `z` relative to `reference`, degrees in (−180, 180].
fn phase_diff_deg(z: Complex64, reference: Complex64) -> f64 {
    -(z / reference).arg() * 180.0 / PI
}

#[test]
fn demo_field_m2_matches_the_generator_inside_every_zone() {
    let generator: Value = serde_json::from_str(
        &std::fs::read_to_string(repo().join("zoning-demo/truth/generator.json")).unwrap(),
    )
    .unwrap();
    let truth = Truth::read(&generator);
    let project = Project::load(&repo().join("zoning-demo/gap-fill.toml")).unwrap();
    let pf = project_field(&project).expect("the demo's field builds");
    let zoning = zoning_of(&project).expect("the demo's zoning reads");

    // The stations' true positions in the estuary frame, by id.
    let mut frame_of = std::collections::HashMap::new();
    for list in ["gauges", "virtual_gauges"] {
        for s in generator[list].as_array().unwrap() {
            frame_of.insert(
                s["id"].as_str().unwrap().to_string(),
                (s["xi"].as_f64().unwrap(), s["across_m"].as_f64().unwrap()),
            );
        }
    }
    let stations = pf.field.stations();
    assert_eq!(stations.len(), 10, "three gauges and seven virtual gauges");
    let true_at: Vec<(f64, f64)> = stations.iter().map(|s| frame_of[&s.id]).collect();

    // The analysis' common complex factor, and the allowance checked at the stations.
    let c = stations
        .iter()
        .zip(&true_at)
        .map(|(s, &(xi, a))| m2(&s.constants) / truth.z(xi, a))
        .sum::<Complex64>()
        / stations.len() as f64;
    for (s, &(xi, a)) in stations.iter().zip(&true_at) {
        let e = (m2(&s.constants) / c - truth.z(xi, a)).norm();
        assert!(
            e <= NOISE_M,
            "station {}: analysed M2 differs from the truth by {e:.5} m (allowance {NOISE_M} m)",
            s.id
        );
    }

    let to_utm = Transformer::new("EPSG:4326", "EPSG:32724").unwrap();
    let omega_deg_per_min = truth.speed_deg_per_h / 60.0;
    let mut checked = 0;
    let (mut worst_amp, mut worst_amp_bound, mut worst_lag, mut worst_lag_bound) =
        (0.0f64, 0.0f64, 0.0f64, 0.0f64);
    for z in &zoning.zones {
        let poly = pf.to_local.polygon_from_lonlat(&z.polygon_lonlat).unwrap();
        let b = poly.bounding_rect().unwrap();
        let mut in_zone = 0;
        let nx = (b.width() / GRID_M).floor() as usize;
        let ny = (b.height() / GRID_M).floor() as usize;
        for i in 0..=nx {
            for j in 0..=ny {
                let (x, y) = (
                    b.min().x + (i as f64 + 0.5) * GRID_M,
                    b.min().y + (j as f64 + 0.5) * GRID_M,
                );
                if !poly.contains(&geo::Point::new(x, y)) {
                    continue;
                }
                in_zone += 1;
                let (k, w) = pf.field.constants_at(x, y);
                assert_eq!(
                    w.outside_by_m, 0.0,
                    "zone {}: ({x:.0}, {y:.0}) lies outside the stations' hull",
                    z.id
                );
                let (lon, lat) = pf.to_lonlat.convert(x, y).unwrap();
                let (e_m, n_m) = to_utm.convert(lon, lat).unwrap();
                let (xi, across_m) = truth.frame(e_m, n_m);
                let zt = truth.z(xi, across_m);
                let zf = m2(&k) / c;

                // The bound from this point's triangle.
                let verts: Vec<(f64, f64)> =
                    w.w.iter()
                        .map(|&(si, _)| {
                            let (sxi, sa) = true_at[si];
                            (
                                truth.amplitude_m(sxi),
                                truth.phase_deg(sxi, sa).to_radians(),
                            )
                        })
                        .collect();
                let fold = |f: fn(f64, f64) -> f64, init: f64, pick: fn(&(f64, f64)) -> f64| {
                    verts.iter().map(pick).fold(init, f)
                };
                let a_max = fold(f64::max, f64::NEG_INFINITY, |v| v.0);
                let a_min = fold(f64::min, f64::INFINITY, |v| v.0);
                let d_phi = fold(f64::max, f64::NEG_INFINITY, |v| v.1)
                    - fold(f64::min, f64::INFINITY, |v| v.1);
                let amp_interp_m = a_max * d_phi * d_phi / 8.0;
                let phase_bound_rad = ((a_max - a_min) * d_phi / 4.0 + a_max * d_phi.powi(3) / 6.0)
                    .atan2(a_min * d_phi.cos())
                    + (NOISE_M / a_min).asin();
                let lag_bound_min = phase_bound_rad.to_degrees() / omega_deg_per_min;

                let amp_err = zf.norm() - zt.norm();
                let lag_err = phase_diff_deg(zf, zt) / omega_deg_per_min;
                // The interpolated modulus falls short of the truth, never beyond it but for
                // the noise.
                assert!(
                    amp_err <= NOISE_M && amp_err >= -(amp_interp_m + NOISE_M),
                    "zone {} at xi {xi:.3}, across {across_m:.0} m: M2 amplitude {:.4} m, truth {:.4} m, \
                     allowed from -{:.4} to +{NOISE_M} m (triangle phase range {:.2}°)",
                    z.id,
                    zf.norm(),
                    zt.norm(),
                    amp_interp_m + NOISE_M,
                    d_phi.to_degrees()
                );
                assert!(
                    lag_err.abs() <= lag_bound_min,
                    "zone {} at xi {xi:.3}, across {across_m:.0} m: M2 time lag off by {lag_err:.3} min, \
                     bound {lag_bound_min:.3} min (triangle phase range {:.2}°)",
                    z.id,
                    d_phi.to_degrees()
                );
                if amp_err.abs() > worst_amp {
                    (worst_amp, worst_amp_bound) = (amp_err.abs(), amp_interp_m + NOISE_M);
                }
                if lag_err.abs() > worst_lag {
                    (worst_lag, worst_lag_bound) = (lag_err.abs(), lag_bound_min);
                }
            }
        }
        assert!(in_zone >= 5, "zone {}: only {in_zone} grid points", z.id);
        checked += in_zone;
    }
    assert_eq!(zoning.zones.len(), 7, "the demo's seven zones");
    eprintln!(
        "{checked} points in 7 zones: worst M2 amplitude error {:.1} mm (its bound {:.1} mm), worst time-lag error {:.2} min (its bound {:.2} min)",
        worst_amp * 1000.0,
        worst_amp_bound * 1000.0,
        worst_lag,
        worst_lag_bound
    );
}
