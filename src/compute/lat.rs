//! Lowest and Highest Astronomical Tide (LAT, HAT) from harmonic constants.
//!
//! LAT and HAT are the lowest and highest levels predicted over at least 18.61 years (a whole
//! cycle of the Moon's node) at a time step of at most 10 minutes (IHO practice; DOMAIN §6). This
//! module predicts the span on a regular grid, finds the grid's extremes and refines them in
//! continuous time by direct evaluation, and reports both with the instants they occur.
//!
//! # Prediction on the grid
//!
//! The span is cut into blocks of [`BLOCK_S`] (28 days), predicted in parallel by
//! [`predict_grid`]: phasor recurrence (each constituent's phasor `f·H·e^{i(V+u−G)}` rotated by a
//! constant angle and scaled by a constant factor per step) with the phasors evaluated exactly at
//! the start of every block and at anchors [`REANCHOR_S`] (one day) apart inside it. Between two
//! anchors `a` and `b` the phase `V + u − G` and `ln f` are followed linearly from the exact
//! values at both ends, so the recurrence cannot drift beyond one anchor interval.
//!
//! **Error of the re-anchoring.** Held constant over an anchor interval L, f and u would err by
//! their change over L: at most `L·max|ḟ|·H` and `L·f·max|u̇|·H`. From the textbook nodal series
//! (Pugh 1987; `constituents.md`): f_M2 varies by 0.0373 cos N and u_M2 by 2.14° sin N, N
//! turning by Ω = 360°/6798.4 d, so over a day Δf_M2 ≤ 0.0373·Ω·1 d = 3.4e-5 and
//! Δu_M2 ≤ 0.0374 rad·Ω·1 d = 3.5e-5 rad (K1: 1.1e-4 and 1.4e-4; K2: 2.6e-4 and 2.9e-4) —
//! up to about 0.1 mm per metre of amplitude, too much to ignore. Interpolated linearly between
//! both exact ends, as here, the error is the curvature instead: at most `L²/8·max|g''|` for each
//! of g = ln f, u, which for a term `A sin(N)` is `L²/8·A·Ω²` = 1.1e-7·A with L = 1 day: 4e-9 m
//! per metre of M2, 2e-8 m per metre of K1, 3e-8 m per metre of K2 (L2 and M1, which turn with
//! the perigee's 8.85-year cycle as well, stay below 1e-7 m per metre). The mean longitudes are
//! linear in time to within their T² terms (curvature over a day below 1e-12°). The test
//! `grid_matches_direct_evaluation_at_random_instants` measures the whole error of the grid
//! against [`predict_at`] at random instants over 18.61 years (37 constituents, limit 0.1 mm;
//! measured about 1e-8 m).
//!
//! # Refinement of the extremes
//!
//! A grid sample nearest the true minimum `t*` is at most `s/2` from it (s the step), so it lies
//! above the minimum by at most `½·max|h''|·(s/2)²` with `max|h''| ≤ Σ f̂_k H_k ω_k²` (f̂_k the
//! largest nodal factor of constituent k over the span): the discretisation bound
//! [`LatHat::grid_bound_m`] (0.47 mm for M2 of 1 m and S2 of 0.4 m at 6 minutes). Every local
//! minimum of the grid within that bound (plus 1e-6 m for the recurrence) of the grid's lowest
//! value is a candidate. Each is refined by a **golden-section search with direct evaluation**
//! ([`predict_at`], nodal corrections at the instant) on the two steps around it, to 0.01 s
//! (the height error of that time tolerance, `½ h'' δt²`, is below 1e-12 m); the lowest refined
//! value is LAT. The true minimum lies within one step of the lowest grid sample of its trough,
//! so it is bracketed; the search assumes one turning point in that bracket of two steps (at
//! most 20 minutes), true of astronomical tides (the fastest turning comes from shallow-water
//! constituents whose periods are hours). The ends of the span are candidates too (searched on
//! the side inside the span). HAT is the same with maxima.
//!
//! f̂_k is the largest nodal factor found at instants 10 days apart across the span, plus 0.01
//! (f changes by less than 0.003 in 5 days for every constituent of the table).

use rayon::prelude::*;

use crate::compute::astro::{astro_at, nodal_args, nodal_fu_with};
use crate::compute::harmonic::{predict_at, predict_grid, HarmonicConstants};

#[cfg(doc)]
use crate::compute::harmonic::REANCHOR_S;

/// Shortest span accepted, years of 365.25 days (a nodal cycle, IHO practice).
pub const MIN_YEARS: f64 = 18.61;
/// Longest time step accepted, seconds (10 minutes, IHO practice).
pub const MAX_STEP_S: f64 = 600.0;
/// A Julian year, seconds.
pub const JULIAN_YEAR_S: f64 = 365.25 * 86_400.0;
/// Length of the blocks predicted in parallel, seconds (28 days). Each block starts from phasors
/// evaluated exactly at its first instant.
pub const BLOCK_S: f64 = 28.0 * 86_400.0;
/// Time tolerance of the golden-section refinement, seconds.
pub const REFINE_TOL_S: f64 = 0.01;
/// Allowance for the recurrence's error when choosing candidates, metres (100 × its bound).
const RECURRENCE_ALLOWANCE_M: f64 = 1e-6;
/// Spacing of the instants at which the largest nodal factors are sought, seconds.
const F_SAMPLE_S: f64 = 10.0 * 86_400.0;
/// Added to the largest sampled nodal factor to cover the instants between samples.
const F_MARGIN: f64 = 0.01;

/// LAT and HAT of a prediction, with the instants they occur.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LatHat {
    /// Lowest level, metres on the datum of the constants' Z0, refined in continuous time.
    pub lat_m: f64,
    /// Instant of the lowest level, UTC seconds.
    pub lat_at_s: f64,
    /// Highest level, metres, refined in continuous time.
    pub hat_m: f64,
    /// Instant of the highest level, UTC seconds.
    pub hat_at_s: f64,
    /// Number of grid instants predicted.
    pub samples: usize,
    /// Lowest value on the grid itself, metres (not refined).
    pub grid_lat_m: f64,
    /// Highest value on the grid itself, metres (not refined).
    pub grid_hat_m: f64,
    /// Bound on how far a grid extreme can lie inside the true one from the step alone:
    /// `½·Σ f̂ H ω²·(step/2)²`, metres.
    pub grid_bound_m: f64,
}

/// Why LAT and HAT cannot be computed as asked.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum LatHatError {
    /// The time step is longer than [`MAX_STEP_S`].
    #[error("time step {step_s} s is longer than {max_s} s (LAT and HAT need a step of at most 10 minutes)")]
    StepTooLong {
        /// The step asked for, seconds.
        step_s: f64,
        /// The longest step accepted, seconds.
        max_s: f64,
    },
    /// The time step is zero, negative or not a number.
    #[error("time step {step_s} s is not a positive number")]
    StepNotPositive {
        /// The step asked for, seconds.
        step_s: f64,
    },
    /// The span is shorter than [`MIN_YEARS`] (or not a number).
    #[error("span of {years} years is shorter than {min_years} years (a whole nodal cycle)")]
    SpanTooShort {
        /// The span asked for, years.
        years: f64,
        /// The shortest span accepted, years.
        min_years: f64,
    },
    /// The start is not a finite time.
    #[error("start time {start_s} is not a finite number of seconds")]
    StartNotFinite {
        /// The start asked for, UTC seconds.
        start_s: f64,
    },
    /// A constant is not finite.
    #[error("harmonic constants contain a non-finite value")]
    ConstantsNotFinite,
}

/// Largest nodal factor of every constituent over `[start_s, end_s]`, sampled every
/// [`F_SAMPLE_S`], plus [`F_MARGIN`].
fn largest_nodal_factors(k: &HarmonicConstants, start_s: f64, end_s: f64) -> Vec<f64> {
    let mut fmax = vec![0.0_f64; k.constituents.len()];
    let n = ((end_s - start_s) / F_SAMPLE_S).ceil() as usize;
    for i in 0..=n {
        let t = (start_s + i as f64 * F_SAMPLE_S).min(end_s);
        let o = nodal_args(&astro_at(t));
        for (j, (c, _, _)) in k.constituents.iter().enumerate() {
            fmax[j] = fmax[j].max(nodal_fu_with(c, &o).0);
        }
    }
    fmax.iter().map(|f| f + F_MARGIN).collect()
}

/// Bound on `|h''|` over the span, metres per second squared: `Σ f̂ H ω²`.
fn curvature_bound_m_per_s2(k: &HarmonicConstants, fmax: &[f64]) -> f64 {
    k.constituents
        .iter()
        .zip(fmax)
        .map(|((c, h, _), f)| {
            let w = c.speed_deg_per_h.to_radians() / 3600.0;
            f * h.abs() * w * w
        })
        .sum()
}

/// Grid values at indices `lo..hi` of the grid `start_s + i·step_s` (a block starts from an exact
/// evaluation at its first index).
fn block_heights(
    k: &HarmonicConstants,
    start_s: f64,
    step_s: f64,
    lo: usize,
    hi: usize,
) -> Vec<f64> {
    predict_grid(k, start_s + lo as f64 * step_s, step_s, hi - lo)
}

/// Local extremes of one block: (index, value) of the minima and maxima within `bound_m` of the
/// block's lowest and highest values.
struct BlockExtremes {
    min_m: f64,
    max_m: f64,
    minima: Vec<(usize, f64)>,
    maxima: Vec<(usize, f64)>,
}

fn block_extremes(
    k: &HarmonicConstants,
    start_s: f64,
    step_s: f64,
    n: usize,
    i0: usize,
    i1: usize,
    bound_m: f64,
) -> BlockExtremes {
    // One sample either side, so that the block's first and last samples can be judged.
    let lo = i0.saturating_sub(1);
    let hi = (i1 + 1).min(n);
    let h = block_heights(k, start_s, step_s, lo, hi);
    let mut e = BlockExtremes {
        min_m: f64::INFINITY,
        max_m: f64::NEG_INFINITY,
        minima: Vec::new(),
        maxima: Vec::new(),
    };
    for i in i0..i1 {
        let v = h[i - lo];
        let left = (i > 0).then(|| h[i - 1 - lo]);
        let right = (i + 1 < n).then(|| h[i + 1 - lo]);
        // A missing neighbour (an end of the span) does not disqualify.
        if left.is_none_or(|a| v <= a) && right.is_none_or(|c| v <= c) {
            e.minima.push((i, v));
        }
        if left.is_none_or(|a| v >= a) && right.is_none_or(|c| v >= c) {
            e.maxima.push((i, v));
        }
        e.min_m = e.min_m.min(v);
        e.max_m = e.max_m.max(v);
    }
    let (min_m, max_m) = (e.min_m, e.max_m);
    e.minima.retain(|&(_, v)| v <= min_m + bound_m);
    e.maxima.retain(|&(_, v)| v >= max_m - bound_m);
    e
}

/// Golden-section search for the minimum of `g` on `[a, b]`, to [`REFINE_TOL_S`]; returns
/// `(t, g(t))`.
fn golden_min(g: impl Fn(f64) -> f64, mut a: f64, mut b: f64) -> (f64, f64) {
    const R: f64 = 0.618_033_988_749_894_8; // (√5 − 1)/2
    let mut c = b - R * (b - a);
    let mut d = a + R * (b - a);
    let (mut gc, mut gd) = (g(c), g(d));
    while b - a > REFINE_TOL_S {
        if gc <= gd {
            b = d;
            d = c;
            gd = gc;
            c = b - R * (b - a);
            gc = g(c);
        } else {
            a = c;
            c = d;
            gc = gd;
            d = a + R * (b - a);
            gd = g(d);
        }
    }
    if gc <= gd {
        (c, gc)
    } else {
        (d, gd)
    }
}

/// Refine the candidates (grid indices) of a minimum of `sign·h`; returns `(t, h)` of the lowest
/// `sign·h`.
fn refine(
    k: &HarmonicConstants,
    start_s: f64,
    step_s: f64,
    end_s: f64,
    candidates: &[(usize, f64)],
    sign: f64,
) -> (f64, f64) {
    let g = |t: f64| sign * predict_at(k, t);
    let mut best = (f64::NAN, f64::INFINITY);
    for &(i, _) in candidates {
        let ti = start_s + i as f64 * step_s;
        let a = (ti - step_s).max(start_s);
        let b = (ti + step_s).min(end_s);
        let (mut t, mut v) = golden_min(g, a, b);
        // The grid instant itself, directly evaluated, in case the search ended above it.
        let vi = g(ti);
        if vi < v {
            (t, v) = (ti, vi);
        }
        if v < best.1 {
            best = (t, v);
        }
    }
    (best.0, sign * best.1)
}

/// LAT and HAT of the prediction from `k` over `years` (≥ [`MIN_YEARS`], Julian years) from
/// `start_s` (UTC seconds) at `step_s` (≤ [`MAX_STEP_S`]): the grid `start_s + i·step_s` for
/// `i·step_s ≤ years·JULIAN_YEAR_S`, its extremes refined in continuous time (module
/// documentation). Uses all cores (rayon), one block of [`BLOCK_S`] per task.
pub fn lat_hat(
    k: &HarmonicConstants,
    start_s: f64,
    years: f64,
    step_s: f64,
) -> Result<LatHat, LatHatError> {
    if step_s.is_nan() || step_s <= 0.0 {
        return Err(LatHatError::StepNotPositive { step_s });
    }
    if step_s > MAX_STEP_S {
        return Err(LatHatError::StepTooLong {
            step_s,
            max_s: MAX_STEP_S,
        });
    }
    if years.is_nan() || years < MIN_YEARS || !years.is_finite() {
        return Err(LatHatError::SpanTooShort {
            years,
            min_years: MIN_YEARS,
        });
    }
    if !start_s.is_finite() {
        return Err(LatHatError::StartNotFinite { start_s });
    }
    if !k.z0_m.is_finite()
        || k.constituents
            .iter()
            .any(|(_, h, g)| !h.is_finite() || !g.is_finite())
    {
        return Err(LatHatError::ConstantsNotFinite);
    }
    let span_s = years * JULIAN_YEAR_S;
    let n = (span_s / step_s).floor() as usize + 1;
    let end_s = start_s + (n - 1) as f64 * step_s;
    let fmax = largest_nodal_factors(k, start_s, end_s);
    let half = 0.5 * step_s;
    let grid_bound_m = 0.5 * curvature_bound_m_per_s2(k, &fmax) * half * half;
    let select_m = grid_bound_m + RECURRENCE_ALLOWANCE_M;

    let per_block = ((BLOCK_S / step_s).floor() as usize).max(1);
    let blocks: Vec<BlockExtremes> = (0..n.div_ceil(per_block))
        .into_par_iter()
        .map(|b| {
            let i0 = b * per_block;
            let i1 = (i0 + per_block).min(n);
            block_extremes(k, start_s, step_s, n, i0, i1, select_m)
        })
        .collect();

    let grid_lat_m = blocks.iter().map(|b| b.min_m).fold(f64::INFINITY, f64::min);
    let grid_hat_m = blocks
        .iter()
        .map(|b| b.max_m)
        .fold(f64::NEG_INFINITY, f64::max);
    let lows: Vec<(usize, f64)> = blocks
        .iter()
        .flat_map(|b| b.minima.iter().copied())
        .filter(|&(_, v)| v <= grid_lat_m + select_m)
        .collect();
    let highs: Vec<(usize, f64)> = blocks
        .iter()
        .flat_map(|b| b.maxima.iter().copied())
        .filter(|&(_, v)| v >= grid_hat_m - select_m)
        .collect();
    let (lat_at_s, lat_m) = refine(k, start_s, step_s, end_s, &lows, 1.0);
    let (hat_at_s, hat_m) = refine(k, start_s, step_s, end_s, &highs, -1.0);
    Ok(LatHat {
        lat_m,
        lat_at_s,
        hat_m,
        hat_at_s,
        samples: n,
        grid_lat_m,
        grid_hat_m,
        grid_bound_m,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::astro::{constituent, constituents, Astro};
    use rand::{Rng, SeedableRng};

    /// 2026-01-01T00:00:00Z.
    const T0: f64 = 1_767_225_600.0;

    fn c(name: &str) -> &'static crate::compute::astro::Constituent {
        constituent(name).unwrap()
    }

    /// A realistic set of 37 constituents: every constituent of the table with an equilibrium
    /// amplitude (36 besides Z0) at 1.2 m × its ratio to M2, plus M4 at 0.06 m; lags drawn at
    /// random (invented demo constants).
    fn realistic_37() -> HarmonicConstants {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(37);
        let mut v: Vec<(&'static crate::compute::astro::Constituent, f64, f64)> = constituents()
            .iter()
            .filter(|k| k.name != "Z0")
            .filter_map(|k| {
                k.equilibrium_rel_m2
                    .map(|r| (k, 1.2 * r, rng.gen_range(0.0..360.0)))
            })
            .collect();
        v.push((c("M4"), 0.06, rng.gen_range(0.0..360.0)));
        assert_eq!(v.len(), 37);
        HarmonicConstants {
            z0_m: 2.4,
            constituents: v,
        }
    }

    /// f of M2 from the project's Schureman formula at the node longitude `n_deg`.
    fn f_m2_at_node(n_deg: f64) -> f64 {
        let a = Astro {
            tau_deg: 0.0,
            s_deg: 0.0,
            h_deg: 0.0,
            p_deg: 0.0,
            n_deg,
            p1_deg: 0.0,
        };
        nodal_fu_with(c("M2"), &nodal_args(&a)).0
    }

    /// Largest f of M2 over the nodal cycle (N every 0.01°), from the project's formula.
    fn f_m2_max() -> f64 {
        (0..36_000)
            .map(|i| f_m2_at_node(i as f64 * 0.01))
            .fold(0.0, f64::max)
    }

    #[test]
    fn refuses_a_coarse_step_or_a_short_span() {
        let k = HarmonicConstants {
            z0_m: 0.0,
            constituents: vec![(c("M2"), 1.0, 0.0)],
        };
        // IHO practice: at least 18.61 years at a step of at most 10 minutes.
        assert_eq!(
            lat_hat(&k, T0, 18.61, 601.0),
            Err(LatHatError::StepTooLong {
                step_s: 601.0,
                max_s: 600.0
            })
        );
        assert_eq!(
            lat_hat(&k, T0, 18.6, 360.0),
            Err(LatHatError::SpanTooShort {
                years: 18.6,
                min_years: 18.61
            })
        );
        assert!(matches!(
            lat_hat(&k, T0, 18.61, 0.0),
            Err(LatHatError::StepNotPositive { .. })
        ));
        assert!(matches!(
            lat_hat(&k, T0, f64::NAN, 360.0),
            Err(LatHatError::SpanTooShort { .. })
        ));
        assert!(matches!(
            lat_hat(&k, f64::INFINITY, 18.61, 360.0),
            Err(LatHatError::StartNotFinite { .. })
        ));
        let bad = HarmonicConstants {
            z0_m: 0.0,
            constituents: vec![(c("M2"), f64::NAN, 0.0)],
        };
        assert_eq!(
            lat_hat(&bad, T0, 18.61, 360.0),
            Err(LatHatError::ConstantsNotFinite)
        );
    }

    /// The grid that `lat_hat` scans (blocks of 28 days, each started exactly) against direct
    /// evaluation with nodal corrections at the instant (`predict_at`), at 400 random instants of
    /// 18.61 years at 6 minutes, 37 constituents: within 0.1 mm (the re-anchoring bound of the
    /// module documentation is about 1e-7 m).
    #[test]
    fn grid_matches_direct_evaluation_at_random_instants() {
        let k = realistic_37();
        let step = 360.0;
        let n = (MIN_YEARS * JULIAN_YEAR_S / step).floor() as usize + 1;
        let per_block = (BLOCK_S / step) as usize;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let mut worst: f64 = 0.0;
        for _ in 0..400 {
            let i = rng.gen_range(0..n);
            let b = i / per_block;
            let lo = b * per_block;
            let hi = (lo + per_block).min(n);
            let h = block_heights(&k, T0, step, lo, hi);
            let d = (h[i - lo] - predict_at(&k, T0 + i as f64 * step)).abs();
            worst = worst.max(d);
        }
        assert!(worst < 1e-4, "worst {worst} m");
    }

    /// Textbook nodal factor of M2 (Pugh 1987 / Schureman 1958 series,
    /// f = 1.0004 − 0.0373 cos N + 0.0002 cos 2N) against the project's exact Schureman formula:
    /// within 9e-5 over the whole cycle (the worst deviation stated in constituents.md).
    #[test]
    fn textbook_f_m2_agrees_with_the_exact_formula() {
        let mut worst: f64 = 0.0;
        for i in 0..3600 {
            let n = i as f64 * 0.1;
            let r = n.to_radians();
            let textbook = 1.0004 - 0.0373 * r.cos() + 0.0002 * (2.0 * r).cos();
            worst = worst.max((textbook - f_m2_at_node(n)).abs());
        }
        assert!(worst <= 9e-5, "worst {worst}");
        // The largest f is at N = 180° (I smallest): textbook 1.0004 + 0.0373 + 0.0002.
        assert!((f_m2_max() - 1.0379).abs() <= 9e-5);
        assert!((f_m2_at_node(180.0) - f_m2_max()).abs() < 1e-12);
    }

    /// Pure M2 of H = 1 m: LAT = Z0 − max_t f_M2(t)·H over the nodal cycle (Schureman 1958;
    /// Pugh 1987: f_M2 = 1.0004 − 0.0373 cos N + 0.0002 cos 2N, largest at N = 180°), HAT
    /// symmetric. Every M2 low water (12.42 h apart) reaches Z0 − f·H; within half a period of
    /// N = 180° f differs from its largest value by 0.0373·(ΔN)²/2 < 1e-9 (ΔN = 2.4e-4 rad), so
    /// LAT equals Z0 − f_max·H to 1e-6 m and occurs at N = 180° ± 0.1°.
    #[test]
    fn pure_m2_lat_is_z0_minus_largest_f() {
        let k = HarmonicConstants {
            z0_m: 3.0,
            constituents: vec![(c("M2"), 1.0, 77.0)],
        };
        let r = lat_hat(&k, T0, MIN_YEARS, 360.0).unwrap();
        let fmax = f_m2_max();
        assert!((r.lat_m - (3.0 - fmax)).abs() < 1e-6, "LAT {}", r.lat_m);
        assert!((r.hat_m - (3.0 + fmax)).abs() < 1e-6, "HAT {}", r.hat_m);
        // Textbook value 1.0379, within its 9e-5 of the exact formula (constituents.md).
        assert!((r.lat_m - (3.0 - 1.0379)).abs() < 9e-5 + 1e-6);
        for t in [r.lat_at_s, r.hat_at_s] {
            let n = astro_at(t).n_deg;
            assert!((n - 180.0).abs() < 0.1, "N {n} at {t}");
        }
        // The reported levels are direct evaluations at the reported instants.
        assert!((predict_at(&k, r.lat_at_s) - r.lat_m).abs() < 1e-12);
        assert!((predict_at(&k, r.hat_at_s) - r.hat_m).abs() < 1e-12);
        assert_eq!(
            r.samples,
            (MIN_YEARS * JULIAN_YEAR_S / 360.0).floor() as usize + 1
        );
    }

    /// M2 (1.0 m) + S2 (0.4 m): LAT = Z0 − f_max·H_M2 − H_S2 within the alignment bound.
    ///
    /// Lower bound: h(t) ≥ Z0 − f_M2(t)·H_M2 − H_S2 ≥ Z0 − f_max·H_M2 − H_S2 at every instant.
    /// Upper bound (alignment): at successive M2 low waters (phase π, T_M2 = 12.4206 h apart)
    /// S2's phase advances by 30 °/h × 12.4206 h − 360° = 12.62° (DOMAIN §5 speeds), so among
    /// the 29 lows of the spring–neap cycle (14.77 days) that contains the instant of f_max
    /// one has S2 within 6.31° of π (6.4° allowing for u_M2's drift, 0.03° over the cycle):
    /// there h ≤ Z0 − f·H_M2 − H_S2·cos 6.4° with f within 0.0373·(ΔN)²/2 < 1e-6 of f_max
    /// (ΔN ≤ 7.4 d × 360°/6798.4 d). So LAT ≤ expectation + 0.4·(1 − cos 6.4°) + 1e-6 =
    /// expectation + 2.5 mm. A better-aligned spring tide farther from f_max can win only if
    /// f has dropped by less than 2.5 mm, i.e. |N − 180°| < 21°. HAT symmetric.
    ///
    /// Step discretisation: the grid's own extremes lie inside the refined ones by at most
    /// ½·(f_max·H_M2·ω_M2² + H_S2·ω_S2²)·(180 s)² = 0.47 mm at 6 minutes (the bound reported).
    #[test]
    fn m2_s2_lat_is_the_aligned_spring_tide_at_the_largest_f() {
        let k = HarmonicConstants {
            z0_m: 2.0,
            constituents: vec![(c("M2"), 1.0, 30.0), (c("S2"), 0.4, 100.0)],
        };
        let r = lat_hat(&k, T0, MIN_YEARS, 360.0).unwrap();
        let fmax = f_m2_max();
        let expect_lat = 2.0 - fmax - 0.4;
        let expect_hat = 2.0 + fmax + 0.4;
        let align = 0.4 * (1.0 - 6.4_f64.to_radians().cos()) + 1e-6;
        assert!(align < 2.5e-3);
        assert!(
            r.lat_m >= expect_lat - 1e-6,
            "LAT {} below {expect_lat}",
            r.lat_m
        );
        assert!(
            r.lat_m <= expect_lat + align,
            "LAT {} vs {expect_lat}",
            r.lat_m
        );
        assert!(
            r.hat_m <= expect_hat + 1e-6,
            "HAT {} above {expect_hat}",
            r.hat_m
        );
        assert!(
            r.hat_m >= expect_hat - align,
            "HAT {} vs {expect_hat}",
            r.hat_m
        );
        for t in [r.lat_at_s, r.hat_at_s] {
            let n = astro_at(t).n_deg;
            assert!((n - 180.0).abs() < 21.0, "N {n}");
        }
        // Discretisation: the derived bound, and the grid's extremes within it.
        let w = |n: &str| c(n).speed_deg_per_h.to_radians() / 3600.0;
        let derived = 0.5 * (fmax * w("M2").powi(2) + 0.4 * w("S2").powi(2)) * 180.0_f64.powi(2);
        assert!((derived - 4.7e-4).abs() < 0.1e-4, "{derived}");
        // The reported bound uses f̂ = sampled largest f + 0.01 for both: a little larger.
        assert!(r.grid_bound_m >= derived && r.grid_bound_m < 1.02 * derived);
        assert!(r.grid_lat_m >= r.lat_m && r.grid_lat_m - r.lat_m <= r.grid_bound_m);
        assert!(r.hat_m >= r.grid_hat_m && r.hat_m - r.grid_hat_m <= r.grid_bound_m);
    }

    /// 37 constituents: the refined extremes bound every directly evaluated level (5000 random
    /// instants), are no less extreme than the grid's, within the discretisation bound of them,
    /// and are direct evaluations at their instants, which lie in the span.
    #[test]
    fn realistic_set_extremes_bound_the_prediction() {
        let k = realistic_37();
        let r = lat_hat(&k, T0, MIN_YEARS, 360.0).unwrap();
        let end = T0 + (r.samples - 1) as f64 * 360.0;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        for _ in 0..5000 {
            let v = predict_at(&k, rng.gen_range(T0..end));
            assert!(
                v >= r.lat_m && v <= r.hat_m,
                "{v} outside [{}, {}]",
                r.lat_m,
                r.hat_m
            );
        }
        assert!(r.grid_lat_m >= r.lat_m && r.grid_lat_m - r.lat_m <= r.grid_bound_m);
        assert!(r.hat_m >= r.grid_hat_m && r.hat_m - r.grid_hat_m <= r.grid_bound_m);
        assert!((predict_at(&k, r.lat_at_s) - r.lat_m).abs() < 1e-12);
        assert!((predict_at(&k, r.hat_at_s) - r.hat_m).abs() < 1e-12);
        assert!((T0..=end).contains(&r.lat_at_s) && (T0..=end).contains(&r.hat_at_s));
        // A turning point: the level a minute either side is higher (LAT) / lower (HAT).
        for d in [-60.0, 60.0] {
            assert!(predict_at(&k, r.lat_at_s + d) > r.lat_m);
            assert!(predict_at(&k, r.hat_at_s + d) < r.hat_m);
        }
        // A coarser step (10 minutes) finds the same extremes once refined, to 1 mm.
        let r10 = lat_hat(&k, T0, MIN_YEARS, 600.0).unwrap();
        assert!((r10.lat_m - r.lat_m).abs() < 1e-3 && (r10.hat_m - r.hat_m).abs() < 1e-3);
    }
}
