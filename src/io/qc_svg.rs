//! The QC plot of one gauge record: a standalone SVG with the level against time and each flagged
//! sample marked by the kind of fault.
//!
//! Long records are drawn as a min/max envelope per pixel column, so a year of 1-minute samples
//! stays a small file; every flagged sample is still marked (up to [`MAX_MARKERS`] per flag).
//! Levels outside the plotted range (out-of-band values) are marked at the edge with a triangle
//! pointing the way they went.

use std::fmt::Write;

use super::report_html::{esc, fmt_tick, ticks};
use crate::compute::qc::{QcFlag, QcFlags};

/// Most markers drawn per flag.
pub const MAX_MARKERS: usize = 3000;

/// What to draw.
#[derive(Debug)]
pub struct QcPlot<'a> {
    /// Title line (gauge id and name).
    pub title: &'a str,
    /// Sample times, UTC seconds, file order.
    pub times_s: &'a [f64],
    /// Levels above chart datum, metres, file order.
    pub heights_m: &'a [f64],
    /// Flags per sample.
    pub flags: &'a [QcFlags],
    /// Plausible band, metres (drawn as dashed lines when within view).
    pub band_m: (f64, f64),
    /// Levels are above chart datum (else above the record's zero).
    pub levels_above_datum: bool,
}

/// Colour and marker of a flag (marker: c circle, t triangle, s square, d diamond, x cross,
/// b bar at the bottom, g shaded gap).
fn style(f: QcFlag) -> (&'static str, char) {
    match f {
        QcFlag::Spike => ("#d62828", 'c'),
        QcFlag::Rate => ("#f77f00", 't'),
        QcFlag::FlatLine => ("#7b2cbf", 's'),
        QcFlag::LevelShift => ("#0077b6", 'd'),
        QcFlag::TimeLag => ("#2a9d8f", 'b'),
        QcFlag::OutOfBand => ("#111111", 'x'),
        QcFlag::TimeOrder => ("#8d5524", 'b'),
        QcFlag::DuplicateTime => ("#b5838d", 'b'),
        QcFlag::GapBefore => ("#adb5bd", 'g'),
    }
}

fn marker(out: &mut String, kind: char, x: f64, y: f64, colour: &str) {
    let _ = match kind {
        'c' => write!(
            out,
            r#"<circle cx="{x:.1}" cy="{y:.1}" r="4" fill="none" stroke="{colour}" stroke-width="1.8"/>"#
        ),
        't' => write!(
            out,
            r#"<path d="M{x:.1} {:.1} l4.5 8 h-9 z" fill="none" stroke="{colour}" stroke-width="1.6"/>"#,
            y - 5.0
        ),
        's' => write!(
            out,
            r#"<rect x="{:.1}" y="{:.1}" width="7" height="7" fill="none" stroke="{colour}" stroke-width="1.5"/>"#,
            x - 3.5,
            y - 3.5
        ),
        'd' => write!(
            out,
            r#"<path d="M{x:.1} {:.1} l5 6 l-5 6 l-5 -6 z" fill="{colour}" fill-opacity="0.35" stroke="{colour}" stroke-width="1.6"/>"#,
            y - 6.0
        ),
        'x' => write!(
            out,
            r#"<path d="M{:.1} {:.1} l8 8 m0 -8 l-8 8" stroke="{colour}" stroke-width="2"/>"#,
            x - 4.0,
            y - 4.0
        ),
        _ => Ok(()),
    };
}

/// Time tick step (seconds) and label format for a span.
fn time_ticks(t0: f64, t1: f64) -> (f64, &'static str) {
    let span = t1 - t0;
    for (step, fmt) in [
        (3600.0, "%H:%M"),
        (2.0 * 3600.0, "%H:%M"),
        (3.0 * 3600.0, "%d %H:%M"),
        (6.0 * 3600.0, "%m-%d %H:%M"),
        (12.0 * 3600.0, "%m-%d %H:%M"),
        (86400.0, "%m-%d"),
        (2.0 * 86400.0, "%m-%d"),
        (7.0 * 86400.0, "%m-%d"),
        (14.0 * 86400.0, "%m-%d"),
        (30.0 * 86400.0, "%Y-%m-%d"),
        (61.0 * 86400.0, "%Y-%m-%d"),
    ] {
        if span / step <= 9.0 {
            return (step, fmt);
        }
    }
    (122.0 * 86400.0, "%Y-%m-%d")
}

/// Renders the plot.
pub fn render_qc_svg(p: &QcPlot) -> String {
    let (w, h, ml, mr, mt, mb) = (1100.0, 460.0, 64.0, 210.0, 44.0, 56.0);
    let mut out = String::new();
    let n = p.times_s.len();
    let _ = write!(
        out,
        r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {w} {h}" width="{w}" height="{h}" font-family="sans-serif" font-size="12"><rect width="100%" height="100%" fill="white"/><text x="{ml}" y="22" font-size="15" font-weight="bold">{}</text>"#,
        esc(p.title)
    );
    // Ordered, usable-or-not samples for the line: time increasing only.
    let mut ordered = Vec::with_capacity(n);
    let mut latest = f64::NEG_INFINITY;
    for i in 0..n {
        if p.times_s[i] > latest {
            latest = p.times_s[i];
            ordered.push(i);
        }
    }
    if ordered.len() < 2 {
        let _ = write!(
            out,
            r#"<text x="{ml}" y="80">fewer than two samples: nothing to plot</text></svg>"#
        );
        return out;
    }
    let t0 = p.times_s[ordered[0]];
    let t1 = p.times_s[*ordered.last().unwrap()];
    // Vertical range from samples not out of band, with a margin.
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for &i in &ordered {
        if !p.flags[i].contains(QcFlag::OutOfBand) {
            lo = lo.min(p.heights_m[i]);
            hi = hi.max(p.heights_m[i]);
        }
    }
    if !lo.is_finite() {
        lo = p.band_m.0;
        hi = p.band_m.1;
    }
    let pad = ((hi - lo) * 0.08).max(0.05);
    let (lo, hi) = (lo - pad, hi + pad);
    let pw = w - ml - mr;
    let ph = h - mt - mb;
    let x = |t: f64| ml + (t - t0) / (t1 - t0) * pw;
    let y = |v: f64| mt + (hi - v) / (hi - lo) * ph;

    // Grid and axes.
    let yt = ticks(lo, hi, 6);
    let ys = if yt.len() > 1 { yt[1] - yt[0] } else { 1.0 };
    for v in &yt {
        let _ = write!(
            out,
            r##"<line x1="{ml}" y1="{0:.1}" x2="{1}" y2="{0:.1}" stroke="#e3e8ee"/><text x="{2}" y="{0:.1}" dy="4" text-anchor="end" fill="#444">{3}</text>"##,
            y(*v),
            ml + pw,
            ml - 6.0,
            fmt_tick(*v, ys)
        );
    }
    let (step, fmt) = time_ticks(t0, t1);
    let mut tt = (t0 / step).ceil() * step;
    while tt <= t1 {
        if let Some(dt) = chrono::DateTime::from_timestamp(tt as i64, 0) {
            let _ = write!(
                out,
                r##"<line x1="{0:.1}" y1="{mt}" x2="{0:.1}" y2="{1}" stroke="#eef1f4"/><text x="{0:.1}" y="{2}" text-anchor="middle" fill="#444">{3}</text>"##,
                x(tt),
                mt + ph,
                mt + ph + 18.0,
                dt.format(fmt)
            );
        }
        tt += step;
    }
    let _ = write!(
        out,
        r##"<rect x="{ml}" y="{mt}" width="{pw}" height="{ph}" fill="none" stroke="#888"/><text x="{0}" y="{1}" text-anchor="middle" fill="#222">time (UTC), {2} to {3}</text><text transform="translate(16 {4}) rotate(-90)" text-anchor="middle" fill="#222">{5}</text>"##,
        ml + pw / 2.0,
        h - 12.0,
        crate::io::timefmt::utc_label(t0),
        crate::io::timefmt::utc_label(t1),
        mt + ph / 2.0,
        if p.levels_above_datum {
            "level above chart datum (m)"
        } else {
            "level above the record's zero (m)"
        }
    );
    // Plausible band, when within view.
    let band_in_view = [p.band_m.0, p.band_m.1].iter().any(|&b| b > lo && b < hi);
    for b in [p.band_m.0, p.band_m.1] {
        if b > lo && b < hi {
            let _ = write!(
                out,
                r##"<line x1="{ml}" y1="{0:.1}" x2="{1}" y2="{0:.1}" stroke="#111" stroke-dasharray="6 4" stroke-width="1"/>"##,
                y(b),
                ml + pw
            );
        }
    }
    // Gaps: shaded spans.
    let (gap_colour, _) = style(QcFlag::GapBefore);
    for k in 1..ordered.len() {
        let i = ordered[k];
        if p.flags[i].contains(QcFlag::GapBefore) {
            let xa = x(p.times_s[ordered[k - 1]]);
            let xb = x(p.times_s[i]);
            let _ = write!(
                out,
                r#"<rect x="{xa:.1}" y="{mt}" width="{:.1}" height="{ph}" fill="{gap_colour}" fill-opacity="0.35"/>"#,
                (xb - xa).max(1.0)
            );
        }
    }
    // The record: usable samples, min/max envelope per pixel column, broken at gaps.
    let cols = pw.round() as usize;
    let usable: Vec<usize> = ordered
        .iter()
        .copied()
        .filter(|&i| p.flags[i].usable())
        .collect();
    let mut path = String::new();
    let mut pen_down = false;
    let mut k = 0;
    while k < usable.len() {
        let i = usable[k];
        let col = (((p.times_s[i] - t0) / (t1 - t0)) * cols as f64) as usize;
        let (mut mn, mut mx) = (p.heights_m[i], p.heights_m[i]);
        let mut e = k + 1;
        let mut breaks = p.flags[i].contains(QcFlag::GapBefore);
        while e < usable.len() {
            let j = usable[e];
            if p.flags[j].contains(QcFlag::GapBefore)
                || (((p.times_s[j] - t0) / (t1 - t0)) * cols as f64) as usize != col
            {
                break;
            }
            mn = mn.min(p.heights_m[j]);
            mx = mx.max(p.heights_m[j]);
            e += 1;
        }
        if k > 0 && !breaks {
            // A flagged sample in between also breaks the line.
            breaks = usable[k - 1] + 1 != i
                && (usable[k - 1] + 1..i).any(|q| p.flags[q].blocks_interpolation());
        }
        let xc = x(p.times_s[i]);
        let cmd = if pen_down && !breaks { 'L' } else { 'M' };
        if e - k == 1 {
            let _ = write!(path, "{cmd}{xc:.1} {:.1}", y(mn));
        } else {
            let _ = write!(path, "{cmd}{xc:.1} {:.1}L{xc:.1} {:.1}", y(mn), y(mx));
        }
        pen_down = true;
        k = e;
    }
    let _ = write!(
        out,
        r##"<path d="{path}" fill="none" stroke="#1d3557" stroke-width="1.1"/>"##
    );
    // Markers.
    let mut counts = [0usize; crate::compute::qc::N_FLAGS];
    for (i, f) in p.flags.iter().enumerate() {
        for q in f.iter() {
            counts[q as usize] += 1;
            if counts[q as usize] > MAX_MARKERS {
                continue;
            }
            let (colour, kind) = style(q);
            let t = p.times_s[i].clamp(t0, t1);
            match kind {
                'g' => {}
                'b' => {
                    let _ = write!(
                        out,
                        r#"<line x1="{0:.1}" y1="{1:.1}" x2="{0:.1}" y2="{2:.1}" stroke="{colour}" stroke-width="2"/>"#,
                        x(t),
                        mt + ph - 14.0,
                        mt + ph
                    );
                }
                _ => {
                    let v = p.heights_m[i];
                    if !(v >= lo && v <= hi) {
                        // Off the plot: a triangle at the edge pointing the way (a reading that
                        // is not a number at the top).
                        let (yy, d) = if v < lo {
                            (mt + ph - 2.0, 1.0)
                        } else {
                            (mt + 2.0, -1.0)
                        };
                        let _ = write!(
                            out,
                            r#"<path d="M{0:.1} {1:.1} l-6 {2:.1} h12 z" fill="{colour}"/>"#,
                            x(t),
                            yy,
                            10.0 * d
                        );
                    } else {
                        marker(&mut out, kind, x(t), y(v), colour);
                    }
                }
            }
        }
    }
    // Legend.
    let lx = ml + pw + 16.0;
    let mut ly = mt + 10.0;
    let _ = write!(
        out,
        r##"<text x="{lx}" y="{ly}" font-weight="bold">flags (samples)</text>"##
    );
    ly += 22.0;
    let _ = write!(
        out,
        r##"<line x1="{lx}" y1="{0}" x2="{1}" y2="{0}" stroke="#1d3557" stroke-width="1.5"/><text x="{2}" y="{0}" dy="4">usable record</text>"##,
        ly,
        lx + 18.0,
        lx + 26.0
    );
    for f in QcFlag::ALL {
        ly += 22.0;
        let (colour, kind) = style(f);
        match kind {
            'g' => {
                let _ = write!(
                    out,
                    r#"<rect x="{lx}" y="{:.1}" width="18" height="12" fill="{colour}" fill-opacity="0.5"/>"#,
                    ly - 6.0
                );
            }
            'b' => {
                let _ = write!(
                    out,
                    r#"<line x1="{0}" y1="{1:.1}" x2="{0}" y2="{2:.1}" stroke="{colour}" stroke-width="2"/>"#,
                    lx + 9.0,
                    ly - 7.0,
                    ly + 7.0
                );
            }
            _ => marker(&mut out, kind, lx + 9.0, ly, colour),
        }
        let _ = write!(
            out,
            r#"<text x="{}" y="{ly}" dy="4">{} ({})</text>"#,
            lx + 26.0,
            f.as_str(),
            counts[f as usize]
        );
    }
    if counts.iter().any(|&c| c > MAX_MARKERS) {
        ly += 26.0;
        let _ = write!(
            out,
            r##"<text x="{lx}" y="{ly}" fill="#444">first {MAX_MARKERS} marked per flag</text>"##
        );
    }
    if band_in_view {
        ly += 30.0;
        let _ = write!(
            out,
            r##"<text x="{lx}" y="{ly}" fill="#444">dashed: plausible band</text>"##
        );
    }
    out.push_str("</svg>\n");
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn marks_every_flagged_sample_and_stays_small_for_long_records() {
        // A year of 1-minute samples with three flagged: the file stays small (envelope) and
        // has one marker per flag kind present.
        let n = 525_600;
        let t: Vec<f64> = (0..n).map(|i| 1.7e9 + 60.0 * i as f64).collect();
        let h: Vec<f64> = t
            .iter()
            .map(|t| 2.0 + (t / 3600.0 * 28.984f64).to_radians().cos())
            .collect();
        let mut f = vec![QcFlags::default(); n];
        f[1000].insert(QcFlag::Spike);
        f[2000].insert(QcFlag::FlatLine);
        f[3000].insert(QcFlag::LevelShift);
        let svg = render_qc_svg(&QcPlot {
            title: "g",
            times_s: &t,
            heights_m: &h,
            flags: &f,
            band_m: (-8.0, 12.0),
            levels_above_datum: true,
        });
        assert!(svg.len() < 200_000, "{} bytes", svg.len());
        assert_eq!(svg.matches("<circle").count(), 1 + 1); // the spike + its legend entry
        assert!(svg.contains("spike (1)") && svg.contains("flat_line (1)"));
        assert!(svg.contains("level above chart datum (m)"));
        assert!(svg.starts_with("<svg xmlns=\"http://www.w3.org/2000/svg\""));
    }
}
