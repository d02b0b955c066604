//! Co-tidal lines (equal phase) and co-range lines (equal amplitude) of one constituent, from
//! its field sampled on a regular grid in local metres.
//!
//! **Contouring** is marching squares with linear interpolation along the cell edges (the
//! `contour` crate). That crate closes every line around the grid's border, half a cell beyond
//! the outermost samples; those border runs are not contour lines and are cut away, so a line
//! ends at the last cell it crosses.
//!
//! **Phase wraps at 360°.** The phase is contoured relative to the field's circular mean phase
//! `φ̄` (the argument of the mean unit phasor over the grid), unwrapped to ±180° about it, and
//! each line is labelled with its true phase (mod 360°): a field spanning 350°..10° is
//! contoured as −10°..+10° about 0°, and its lines at 355°, 0° and 5° are continuous. A field
//! spanning a whole turn (an amphidrome in the grid) still jumps by 360° somewhere, where the
//! unwrapped phase passes ±180° about the mean; cells across which two neighbouring samples
//! differ by more than 180° hold that jump, and no line is drawn inside them.

use contour::ContourBuilder;

use super::cotidal::Field;

/// A field sampled on a regular grid: `values[j * nx + i]` at `(x0_m + i·step_m, y0_m + j·step_m)`.
#[derive(Debug, Clone, PartialEq)]
pub struct Grid {
    /// Easting of the first column, metres.
    pub x0_m: f64,
    /// Northing of the first row, metres.
    pub y0_m: f64,
    /// Grid step, metres.
    pub step_m: f64,
    /// Columns.
    pub nx: usize,
    /// Rows.
    pub ny: usize,
    /// Values, row after row (south to north), west to east within a row.
    pub values: Vec<f64>,
}

/// What a line joins.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LineKind {
    /// Equal phase (a co-tidal line), degrees.
    Phase,
    /// Equal amplitude (a co-range line), metres.
    Amplitude,
}

/// One line value's polylines, in local metres.
#[derive(Debug, Clone, PartialEq)]
pub struct IsoLine {
    /// Phase or amplitude.
    pub kind: LineKind,
    /// The line's value: the true phase in degrees, in [0, 360), or the amplitude in metres.
    pub value: f64,
    /// Its polylines (closed ones repeat their first point at the end).
    pub parts: Vec<Vec<(f64, f64)>>,
}

/// Why a grid cannot be sampled or contoured.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum IsolineError {
    /// The field does not carry the constituent.
    #[error("the field does not carry {0} (it is not held by every station)")]
    NoConstituent(String),
    /// The grid would be too large.
    #[error("a grid of {nx} × {ny} points is more than {max} points; choose a larger cell")]
    TooLarge {
        /// Columns.
        nx: usize,
        /// Rows.
        ny: usize,
        /// The limit.
        max: usize,
    },
    /// A step that is not a positive number.
    #[error("a step must be a positive number, not {0}")]
    BadStep(f64),
}

/// Most grid points sampled.
pub const MAX_GRID_POINTS: usize = 4_000_000;

/// The constituent `name`'s amplitude (metres) and phase (degrees) grids over the rectangle
/// `(x_min, y_min)`–`(x_max, y_max)` (local metres), sampled every `cell_m` from its
/// south-west corner (the last row and column reach or pass the rectangle's far sides).
pub fn sample_field(
    field: &Field,
    name: &str,
    min_m: (f64, f64),
    max_m: (f64, f64),
    cell_m: f64,
) -> Result<(Grid, Grid), IsolineError> {
    if !(cell_m.is_finite() && cell_m > 0.0) {
        return Err(IsolineError::BadStep(cell_m));
    }
    let k = field
        .constituents()
        .iter()
        .position(|c| c.name == name)
        .ok_or_else(|| IsolineError::NoConstituent(name.to_string()))?;
    let nx = ((max_m.0 - min_m.0) / cell_m).ceil().max(1.0) as usize + 1;
    let ny = ((max_m.1 - min_m.1) / cell_m).ceil().max(1.0) as usize + 1;
    if nx.saturating_mul(ny) > MAX_GRID_POINTS {
        return Err(IsolineError::TooLarge {
            nx,
            ny,
            max: MAX_GRID_POINTS,
        });
    }
    let mut amp = Vec::with_capacity(nx * ny);
    let mut phase = Vec::with_capacity(nx * ny);
    for j in 0..ny {
        for i in 0..nx {
            let (c, _) =
                field.constants_at(min_m.0 + i as f64 * cell_m, min_m.1 + j as f64 * cell_m);
            amp.push(c.constituents[k].1);
            phase.push(c.constituents[k].2);
        }
    }
    let grid = |values| Grid {
        x0_m: min_m.0,
        y0_m: min_m.1,
        step_m: cell_m,
        nx,
        ny,
        values,
    };
    Ok((grid(amp), grid(phase)))
}

/// The circular mean of angles in degrees, in [0, 360); `None` when the mean unit phasor has
/// (almost) no length (angles spread evenly round the circle).
pub fn circular_mean_deg(values: &[f64]) -> Option<f64> {
    let (s, c) = values.iter().fold((0.0, 0.0), |acc, v| {
        let r = v.to_radians();
        (acc.0 + r.sin(), acc.1 + r.cos())
    });
    let n = values.len() as f64;
    if values.is_empty() || s.hypot(c) < 1e-9 * n {
        return None;
    }
    Some(s.atan2(c).to_degrees().rem_euclid(360.0))
}

/// `a − b` wrapped to [−180, 180).
fn wrap180(d: f64) -> f64 {
    (d + 180.0).rem_euclid(360.0) - 180.0
}

/// Multiples of `step` in `[lo, hi]`.
fn multiples(lo: f64, hi: f64, step: f64) -> Vec<f64> {
    let (k0, k1) = ((lo / step).ceil() as i64, (hi / step).floor() as i64);
    (k0..=k1).map(|k| k as f64 * step).collect()
}

/// Co-range lines every `step_m` metres (the multiples of it within the grid's range).
pub fn amplitude_lines(amp: &Grid, step_m: f64) -> Result<Vec<IsoLine>, IsolineError> {
    if !(step_m.is_finite() && step_m > 0.0) {
        return Err(IsolineError::BadStep(step_m));
    }
    let (lo, hi) = range(&amp.values);
    let levels = multiples(lo, hi, step_m);
    Ok(contour_levels(amp, &amp.values, &levels, None)
        .into_iter()
        .zip(&levels)
        .map(|(parts, v)| IsoLine {
            kind: LineKind::Amplitude,
            value: *v,
            parts,
        })
        .filter(|l| !l.parts.is_empty())
        .collect())
}

/// Co-tidal lines every `step_deg` degrees of true phase (see the module's docs for the wrap).
pub fn phase_lines(phase: &Grid, step_deg: f64) -> Result<Vec<IsoLine>, IsolineError> {
    if !(step_deg.is_finite() && step_deg > 0.0) {
        return Err(IsolineError::BadStep(step_deg));
    }
    let mean = circular_mean_deg(&phase.values).unwrap_or(0.0);
    let rel: Vec<f64> = phase.values.iter().map(|g| wrap180(g - mean)).collect();
    let (nx, ny) = (phase.nx, phase.ny);
    // Cells holding the unwrapped phase's jump.
    let mut jump = vec![false; nx.saturating_sub(1) * ny.saturating_sub(1)];
    for j in 0..ny.saturating_sub(1) {
        for i in 0..nx.saturating_sub(1) {
            let v = [
                rel[j * nx + i],
                rel[j * nx + i + 1],
                rel[(j + 1) * nx + i],
                rel[(j + 1) * nx + i + 1],
            ];
            let far = (0..4).any(|a| (a + 1..4).any(|b| (v[a] - v[b]).abs() > 180.0));
            jump[j * (nx - 1) + i] = far;
        }
    }
    let (lo, hi) = range(&rel);
    // True phases `mean + rel`, multiples of the step, strictly within ±180° of the mean.
    let levels: Vec<f64> = multiples(mean + lo, mean + hi, step_deg)
        .into_iter()
        .filter(|t| (t - mean).abs() < 180.0)
        .collect();
    let rel_levels: Vec<f64> = levels.iter().map(|t| t - mean).collect();
    Ok(contour_levels(phase, &rel, &rel_levels, Some(&jump))
        .into_iter()
        .zip(&levels)
        .map(|(parts, t)| IsoLine {
            kind: LineKind::Phase,
            // Rounded to 1e-9° so that a whole-degree line reads as such after the mod.
            value: ((t * 1e9).round() / 1e9).rem_euclid(360.0),
            parts,
        })
        .filter(|l| !l.parts.is_empty())
        .collect())
}

fn range(v: &[f64]) -> (f64, f64) {
    v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |a, x| {
        (a.0.min(*x), a.1.max(*x))
    })
}

/// The lines of `values` (laid out as `grid`) at each level, in local metres, border runs and
/// segments inside `skip` cells cut away.
fn contour_levels(
    grid: &Grid,
    values: &[f64],
    levels: &[f64],
    skip: Option<&[bool]>,
) -> Vec<Vec<Vec<(f64, f64)>>> {
    let (nx, ny) = (grid.nx, grid.ny);
    if nx < 2 || ny < 2 || levels.is_empty() {
        return vec![Vec::new(); levels.len()];
    }
    let Ok(lines) = ContourBuilder::new(nx, ny, true).lines(values, levels) else {
        return vec![Vec::new(); levels.len()];
    };
    // In the crate's coordinates sample i sits at i + 0.5, and the border at 0 and nx (ny).
    let eps = 1e-9;
    let border = |p: &geo::Coord<f64>| {
        p.x <= eps || p.y <= eps || p.x >= nx as f64 - eps || p.y >= ny as f64 - eps
    };
    let skipped = |a: &geo::Coord<f64>, b: &geo::Coord<f64>| {
        skip.is_some_and(|s| {
            let (mx, my) = (0.5 * (a.x + b.x) - 0.5, 0.5 * (a.y + b.y) - 0.5);
            let (i, j) = (mx.floor(), my.floor());
            if i < 0.0 || j < 0.0 || i as usize >= nx - 1 || j as usize >= ny - 1 {
                return false;
            }
            s[j as usize * (nx - 1) + i as usize]
        })
    };
    let to_m = |p: &geo::Coord<f64>| {
        (
            grid.x0_m + (p.x - 0.5) * grid.step_m,
            grid.y0_m + (p.y - 0.5) * grid.step_m,
        )
    };
    lines
        .iter()
        .map(|line| {
            let mut parts = Vec::new();
            for ring in &line.geometry().0 {
                let pts = &ring.0;
                if pts.len() < 2 {
                    continue;
                }
                let keep: Vec<bool> = pts
                    .windows(2)
                    .map(|w| !border(&w[0]) && !border(&w[1]) && !skipped(&w[0], &w[1]))
                    .collect();
                let nseg = keep.len();
                if keep.iter().all(|k| *k) {
                    parts.push(pts.iter().map(to_m).collect());
                    continue;
                }
                // Start after a cut segment so that no kept run is split at the ring's start.
                let first_cut = keep.iter().position(|k| !k).expect("a cut segment");
                let mut run: Vec<(f64, f64)> = Vec::new();
                for s in 1..=nseg {
                    let k = (first_cut + s) % nseg;
                    if keep[k] {
                        if run.is_empty() {
                            run.push(to_m(&pts[k]));
                        }
                        run.push(to_m(&pts[k + 1]));
                    } else if !run.is_empty() {
                        parts.push(std::mem::take(&mut run));
                    }
                }
                if run.len() >= 2 {
                    parts.push(run);
                }
            }
            parts
        })
        .collect()
}

/// Splits polylines where `outside(x, y)` changes along them (tested at each segment's
/// midpoint): the parts inside, and the parts outside.
#[allow(clippy::type_complexity)]
pub fn split_parts(
    parts: &[Vec<(f64, f64)>],
    outside: &dyn Fn(f64, f64) -> bool,
) -> (Vec<Vec<(f64, f64)>>, Vec<Vec<(f64, f64)>>) {
    let (mut ins, mut outs) = (Vec::new(), Vec::new());
    for p in parts {
        let mut cur: Vec<(f64, f64)> = Vec::new();
        let mut cur_out = false;
        for w in p.windows(2) {
            let o = outside(0.5 * (w[0].0 + w[1].0), 0.5 * (w[0].1 + w[1].1));
            if cur.is_empty() {
                cur_out = o;
                cur.push(w[0]);
            } else if o != cur_out {
                let done = std::mem::take(&mut cur);
                if cur_out { &mut outs } else { &mut ins }.push(done);
                cur_out = o;
                cur.push(w[0]);
            }
            cur.push(w[1]);
        }
        if cur.len() >= 2 {
            if cur_out { &mut outs } else { &mut ins }.push(cur);
        }
    }
    (ins, outs)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid(nx: usize, ny: usize, step: f64, f: impl Fn(f64, f64) -> f64) -> Grid {
        let mut values = Vec::new();
        for j in 0..ny {
            for i in 0..nx {
                values.push(f(i as f64 * step, j as f64 * step));
            }
        }
        Grid {
            x0_m: 0.0,
            y0_m: 0.0,
            step_m: step,
            nx,
            ny,
            values,
        }
    }

    /// Phase = 2°/km · x + 101° over 10 km: a line every 5° at x = (φ − 101)/0.002 m,
    /// straight (every vertex within 1e-6 m of it: the interpolation along cell edges is exact
    /// for a linear field), spanning the grid from its first to its last row (analytic).
    #[test]
    fn linear_phase_gives_straight_lines_at_the_analytic_positions() {
        let g = grid(41, 21, 250.0, |x, _| 101.0 + 0.002 * x);
        let lines = phase_lines(&g, 5.0).unwrap();
        let want: Vec<f64> = (1..=4).map(|k| 100.0 + 5.0 * k as f64).collect();
        let got: Vec<f64> = lines.iter().map(|l| l.value).collect();
        assert_eq!(got, want);
        for l in &lines {
            let x_want = (l.value - 101.0) / 0.002;
            assert_eq!(l.parts.len(), 1, "{} {:?}", l.value, l.parts);
            let p = &l.parts[0];
            for (x, _) in p {
                assert!((x - x_want).abs() < 1e-6, "{}: x {x} vs {x_want}", l.value);
            }
            let ys: Vec<f64> = p.iter().map(|q| q.1).collect();
            let (lo, hi) = range(&ys);
            assert!(lo <= 1e-9 && hi >= 5000.0 - 1e-9, "{lo}..{hi}");
        }
    }

    /// Phase 351°..11° across the grid: lines labelled 355, 0, 5 and 10 at the analytic positions,
    /// none at the wrap (the raw phase jumps from 359.x to 0.x between two columns, where a
    /// contour of the raw values would put a bundle of lines).
    #[test]
    fn phase_lines_across_the_wrap() {
        let g = grid(41, 11, 250.0, |x, _| (351.0 + 0.002 * x).rem_euclid(360.0));
        let lines = phase_lines(&g, 5.0).unwrap();
        let got: Vec<f64> = lines.iter().map(|l| l.value).collect();
        assert_eq!(got, vec![355.0, 0.0, 5.0, 10.0]);
        for (l, x_want) in lines.iter().zip([2000.0, 4500.0, 7000.0, 9500.0]) {
            for (x, _) in l.parts.iter().flatten() {
                assert!((x - x_want).abs() < 1e-6, "{}: {x} vs {x_want}", l.value);
            }
        }
    }

    /// A whole turn of phase round a point (an amphidrome): the jump half a turn from the mean
    /// gets no line; every line's vertices have the line's phase (within the interpolation's
    /// error of one cell) and none lies along the jump.
    #[test]
    fn an_amphidrome_draws_no_line_along_its_jump() {
        let f = |x: f64, y: f64| {
            (y - 2525.0)
                .atan2(x - 2525.0)
                .to_degrees()
                .rem_euclid(360.0)
        };
        let g = grid(41, 41, 125.0, f);
        let lines = phase_lines(&g, 30.0).unwrap();
        assert!(!lines.is_empty());
        for l in &lines {
            for (x, y) in l.parts.iter().flatten() {
                let d = wrap180(f(*x, *y) - l.value).abs();
                let r = (x - 2525.0).hypot(y - 2525.0);
                // Away from the centre the phase changes little across a cell.
                if r > 500.0 {
                    assert!(d < 3.0, "{} at {x},{y}: {d}", l.value);
                }
            }
        }
    }

    /// Amplitude 0.81 m + 0.1 m/km · y: co-range lines every 0.05 m at y = (A − 0.81)/1e-4 m
    /// (analytic), horizontal.
    #[test]
    fn amplitude_lines_of_a_linear_field() {
        let g = grid(11, 41, 250.0, |_, y| 0.81 + 1e-4 * y);
        let lines = amplitude_lines(&g, 0.05).unwrap();
        assert_eq!(lines.len(), 20);
        for l in &lines {
            let y_want = (l.value - 0.81) / 1e-4;
            for (_, y) in l.parts.iter().flatten() {
                assert!((y - y_want).abs() < 1e-6, "{}: {y} vs {y_want}", l.value);
            }
        }
    }

    #[test]
    fn circular_mean_and_split() {
        assert!(
            (circular_mean_deg(&[350.0, 10.0]).unwrap() - 0.0).abs() < 1e-9
                || (circular_mean_deg(&[350.0, 10.0]).unwrap() - 360.0).abs() < 1e-9
        );
        assert!(circular_mean_deg(&[0.0, 180.0]).is_none());
        let (i, o) = split_parts(
            &[vec![(0.0, 0.0), (1.0, 0.0), (2.0, 0.0), (3.0, 0.0)]],
            &|x, _| x > 1.5,
        );
        assert_eq!(i, vec![vec![(0.0, 0.0), (1.0, 0.0), (2.0, 0.0)]]);
        assert_eq!(o, vec![vec![(2.0, 0.0), (3.0, 0.0)]]);
    }
}
