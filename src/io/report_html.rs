//! The QA report as one self-contained HTML page (inline CSS and SVG, and a few lines of inline
//! script that only sort the lines table; nothing fetched from the network).
//!
//! Four plots, drawn here as SVG: a map of the zones with the soundings coloured by U95/allowed,
//! each zone's tide with its 95 % band over the survey period, the uncertainty budget as stacked
//! bars per zone, and a histogram of U95/allowed. Tables give the per-order shares, the zones and
//! lines that fail, and the uncertainty inputs (naming those that fell back to demo defaults).

use std::fmt::Write;

use crate::compute::qa::BUDGET_COMPONENTS;
use crate::compute::qa_report::{MapMark, QaReport};

/// Colours of the budget components, in [`BUDGET_COMPONENTS`] order.
const COMPONENT_COLOURS: [&str; 6] = [
    "#3b6ea5", "#8fb8de", "#e0892f", "#c8463d", "#3c9d8f", "#8c5fa8",
];
/// Zone line colours (cycled).
const ZONE_COLOURS: [&str; 8] = [
    "#1f5f8b", "#c0392b", "#2e8b57", "#8e44ad", "#d4a017", "#16a0a0", "#7f5539", "#d35400",
];

/// Colour for a U95/allowed ratio.
pub fn ratio_colour(r: f64) -> &'static str {
    match r {
        r if r <= 0.5 => "#1b7f4c",
        r if r <= 0.8 => "#7fbf4d",
        r if r <= 1.0 => "#e9c46a",
        r if r <= 1.5 => "#ee7d3b",
        _ => "#c0262d",
    }
}

pub(crate) fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// A share of the report (already rounded to 0.1 %, `compute::qa::SHARE_DECIMALS`) in percent.
fn pct(x: f64) -> String {
    format!("{:.1} %", 100.0 * x)
}

/// An input share (such as the acceptance share) in percent, with the decimals it was given
/// (up to 0.0001 %): 0.95 → "95 %", 0.9505 → "95.05 %".
fn pct_given(x: f64) -> String {
    let s = format!("{:.4}", 100.0 * x);
    let s = s.trim_end_matches('0').trim_end_matches('.');
    format!("{s} %")
}

/// An input number as the project gave it: the shortest decimal that reads back to it, with
/// ".0" on whole numbers (1 → "1.0", 0.0075 → "0.0075").
fn given(x: f64) -> String {
    let s = format!("{x}");
    if s.contains('.') || !x.is_finite() {
        s
    } else {
        s + ".0"
    }
}

/// A ratio of the report (already rounded, `compute::qa::RATIO_DECIMALS`).
fn ratio(x: f64) -> String {
    format!("{x:.3}")
}

/// "Nice" tick positions covering `[lo, hi]`.
pub(crate) fn ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    if hi.partial_cmp(&lo) != Some(std::cmp::Ordering::Greater) {
        return vec![lo];
    }
    let raw = (hi - lo) / n as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let mut t = (lo / step).ceil() * step;
    let mut out = Vec::new();
    while t <= hi + 1e-9 * step {
        out.push(t);
        t += step;
    }
    out
}

pub(crate) fn fmt_tick(v: f64, step_hint: f64) -> String {
    let d = if step_hint >= 1.0 {
        0
    } else {
        (-step_hint.log10()).ceil() as usize
    };
    format!("{v:.d$}")
}

/// Colour stops of the zone-boundary step scale, from no step to the scale's top: pale blue to
/// deep violet, apart from the green-to-red of the soundings' U95/allowed.
const STEP_STOPS: [(f64, (u8, u8, u8)); 5] = [
    (0.0, (0xd4, 0xe4, 0xf4)),
    (0.25, (0x7f, 0xb0, 0xdc)),
    (0.5, (0x3b, 0x6c, 0xc0)),
    (0.75, (0x5b, 0x2a, 0x9e)),
    (1.0, (0x2a, 0x00, 0x4e)),
];

/// The top of the step colour scale for a largest |step| of `max_m`: the next multiple of
/// 0.05 m (at least 0.05 m).
pub(crate) fn step_scale_top_m(max_m: f64) -> f64 {
    ((max_m / 0.05).ceil() * 0.05).max(0.05)
}

/// Colour of a step of size `v_m` on a scale from 0 to `top_m`.
pub(crate) fn step_colour(v_m: f64, top_m: f64) -> String {
    let f = (v_m.abs() / top_m).clamp(0.0, 1.0);
    let k = STEP_STOPS
        .windows(2)
        .position(|w| f <= w[1].0)
        .unwrap_or(STEP_STOPS.len() - 2);
    let (a, b) = (STEP_STOPS[k], STEP_STOPS[k + 1]);
    let t = (f - a.0) / (b.0 - a.0);
    let mix = |x: u8, y: u8| (x as f64 + t * (y as f64 - x as f64)).round() as u8;
    format!(
        "#{:02x}{:02x}{:02x}",
        mix(a.1 .0, b.1 .0),
        mix(a.1 .1, b.1 .1),
        mix(a.1 .2, b.1 .2)
    )
}

/// The step colour scale's legend: a bar `w` wide at (`x`, `y`) with ticks in metres.
pub(crate) fn step_legend(out: &mut String, x: f64, y: f64, w: f64, top_m: f64) {
    let _ = write!(
        out,
        r#"<text x="{x}" y="{}" class="tick">Largest tide step across the edge |tide_b − tide_a| (m)</text>"#,
        y - 4.0
    );
    let n = 20;
    for i in 0..n {
        let v = (i as f64 + 0.5) / n as f64 * top_m;
        let _ = write!(
            out,
            r#"<rect x="{:.1}" y="{y}" width="{:.1}" height="10" fill="{}"/>"#,
            x + i as f64 * w / n as f64,
            w / n as f64 + 0.3,
            step_colour(v, top_m)
        );
    }
    let t = ticks(0.0, top_m, 4);
    let st = if t.len() > 1 { t[1] - t[0] } else { top_m };
    for v in t {
        let xx = x + v / top_m * w;
        let _ = write!(
            out,
            r##"<line x1="{xx:.1}" y1="{}" x2="{xx:.1}" y2="{}" stroke="#333"/><text x="{xx:.1}" y="{}" class="tick" text-anchor="middle">{}</text>"##,
            y + 10.0,
            y + 14.0,
            y + 25.0,
            fmt_tick(v, st)
        );
    }
}

/// Draws each zone-boundary step's shared edge coloured by its largest |step|, labels the worst
/// three, and the colour scale's legend at `legend_at` when given; `xy` maps the edges'
/// coordinates (longitude/latitude) to the plot.
pub(crate) fn step_edges_svg(
    out: &mut String,
    steps: &[crate::compute::boundary::BoundaryStep],
    xy: &dyn Fn(f64, f64) -> (f64, f64),
    legend_at: Option<(f64, f64)>,
) {
    if steps.is_empty() {
        return;
    }
    let top = step_scale_top_m(steps.iter().map(|s| s.max_step_m.abs()).fold(0.0, f64::max));
    let mut labels = Vec::new();
    for (rank, st) in steps.iter().enumerate() {
        let col = step_colour(st.max_step_m, top);
        for part in &st.edge_lonlat {
            let mut d = String::new();
            for (j, p) in part.iter().enumerate() {
                let (x, y) = xy(p[0], p[1]);
                let _ = write!(d, "{}{x:.1},{y:.1} ", if j == 0 { "M" } else { "L" });
            }
            let _ = write!(
                out,
                r##"<path class="step-casing" d="{d}" fill="none" stroke="#111111" stroke-width="8" stroke-linecap="butt"/><path class="step-edge" d="{d}" fill="none" stroke="{col}" stroke-width="5" stroke-linecap="butt"><title>{} | {}: largest step {:+.3} m</title></path>"##,
                esc(&st.zone_a),
                esc(&st.zone_b),
                st.max_step_m
            );
        }
        // The worst three are labelled at the middle of their longest part.
        let longest = st.edge_lonlat.iter().max_by(|a, b| {
            let len = |p: &Vec<[f64; 2]>| {
                p.windows(2)
                    .map(|w| {
                        let (a, b) = (xy(w[0][0], w[0][1]), xy(w[1][0], w[1][1]));
                        (a.0 - b.0).hypot(a.1 - b.1)
                    })
                    .sum::<f64>()
            };
            len(a).total_cmp(&len(b))
        });
        if let (true, Some(part)) = (rank < 3, longest) {
            let m = xy(part[part.len() / 2][0], part[part.len() / 2][1]);
            labels.push((
                rank,
                m.0,
                m.1,
                format!(
                    "{} | {}: {:.3} m",
                    st.zone_a,
                    st.zone_b,
                    st.max_step_m.abs()
                ),
            ));
        }
    }
    for (rank, x, y, text) in labels {
        // Left of the point, or right of and above it when the plot's edge is too near (about
        // 6.5 px a character at the label's size).
        let width = 6.5 * (text.chars().count() + 3) as f64;
        let (tx, ty, anchor) = if x - 8.0 - width > 2.0 {
            (x - 8.0, y + 4.0, "end")
        } else {
            (x + 8.0, y - 8.0, "start")
        };
        let _ = write!(
            out,
            r##"<circle cx="{x:.1}" cy="{y:.1}" r="3" fill="#111"/><text x="{tx:.1}" y="{ty:.1}" class="steplabel" text-anchor="{anchor}">{}. {}</text>"##,
            rank + 1,
            esc(&text)
        );
    }
    if let Some((x, y)) = legend_at {
        step_legend(out, x, y, 180.0, top);
    }
}

/// Width of the map's legend column, right of the plot.
const LEGEND_W: f64 = 200.0;

fn map_svg(r: &QaReport, out: &mut String) {
    let (w, m) = (720.0, 56.0);
    let mut lon = (f64::INFINITY, f64::NEG_INFINITY);
    let mut lat = (f64::INFINITY, f64::NEG_INFINITY);
    for (_, mp) in &r.zone_polygons {
        for p in &mp.0 {
            for c in p.exterior().0.iter() {
                lon = (lon.0.min(c.x), lon.1.max(c.x));
                lat = (lat.0.min(c.y), lat.1.max(c.y));
            }
        }
    }
    for p in &r.map_points {
        lon = (lon.0.min(p.lon), lon.1.max(p.lon));
        lat = (lat.0.min(p.lat), lat.1.max(p.lat));
    }
    if !lon.0.is_finite() {
        return;
    }
    let k = ((lat.0 + lat.1) / 2.0).to_radians().cos().max(0.01);
    // As tall as the area's shape asks, within 420 to 760 px.
    let aspect = (lat.1 - lat.0) / ((lon.1 - lon.0) * k).max(1e-12);
    let h: f64 = (aspect * (w - 2.0 * m) + 2.0 * m)
        .clamp(420.0, 760.0)
        .round();
    let sx = (w - 2.0 * m) / ((lon.1 - lon.0) * k).max(1e-12);
    let sy = (h - 2.0 * m) / (lat.1 - lat.0).max(1e-12);
    let s = sx.min(sy);
    let x = |v: f64| m + (v - lon.0) * k * s;
    let y = |v: f64| h - m - (v - lat.0) * s;
    let _ = write!(
        out,
        r#"<svg class="plot map" viewBox="0 0 {} {h}" role="img" aria-labelledby="map-title"><title id="map-title">Map of zones and soundings coloured by U95/allowed</title>"#,
        w + LEGEND_W
    );
    let _ = write!(
        out,
        r##"<rect x="0" y="0" width="{w}" height="{h}" fill="#f4f8fb"/>"##
    );
    let mut labels = Vec::new();
    for (i, (id, mp)) in r.zone_polygons.iter().enumerate() {
        let mut cx = (0.0, 0.0, 0.0);
        for p in &mp.0 {
            let mut d = String::new();
            for (j, c) in p.exterior().0.iter().enumerate() {
                let _ = write!(
                    d,
                    "{}{:.1},{:.1} ",
                    if j == 0 { "M" } else { "L" },
                    x(c.x),
                    y(c.y)
                );
                cx = (cx.0 + c.x, cx.1 + c.y, cx.2 + 1.0);
            }
            let _ = write!(
                out,
                r##"<path class="zone" d="{d}Z" fill="{}" fill-opacity="0.08" stroke="#34495e" stroke-width="1.2"/>"##,
                ZONE_COLOURS[i % ZONE_COLOURS.len()]
            );
        }
        if cx.2 > 0.0 {
            labels.push((x(cx.0 / cx.2), y(cx.1 / cx.2), esc(id)));
        }
    }
    // Judged soundings, the worst drawn last (on top); then drying heights and the soundings
    // not reduced, each in its own symbol above them.
    let mut judged: Vec<(f64, f64, f64)> = r
        .map_points
        .iter()
        .filter_map(|p| match p.mark {
            MapMark::Judged(v) => Some((v, p.lon, p.lat)),
            _ => None,
        })
        .collect();
    judged.sort_by(|a, b| a.0.total_cmp(&b.0));
    out.push_str(r#"<g class="judged">"#);
    for (v, lo, la) in judged {
        let _ = write!(
            out,
            r#"<circle cx="{:.1}" cy="{:.1}" r="1.6" fill="{}"/>"#,
            x(lo),
            y(la),
            ratio_colour(v)
        );
    }
    out.push_str("</g>");
    out.push_str(r##"<g class="drying" fill="none" stroke="#0a3d62" stroke-width="1.1">"##);
    for p in r.map_points.iter().filter(|p| p.mark == MapMark::Drying) {
        let _ = write!(
            out,
            r#"<rect x="{:.1}" y="{:.1}" width="4.4" height="4.4"/>"#,
            x(p.lon) - 2.2,
            y(p.lat) - 2.2
        );
    }
    out.push_str("</g>");
    out.push_str(r##"<g class="unreduced" stroke="#4a2040" stroke-width="1.2">"##);
    for p in &r.map_points {
        if let MapMark::Unreduced(st) = p.mark {
            let (cx, cy) = (x(p.lon), y(p.lat));
            let _ = write!(
                out,
                r#"<path d="M{:.1},{:.1}L{:.1},{:.1}M{:.1},{:.1}L{:.1},{:.1}"><title>{st}</title></path>"#,
                cx - 2.2,
                cy - 2.2,
                cx + 2.2,
                cy + 2.2,
                cx - 2.2,
                cy + 2.2,
                cx + 2.2,
                cy - 2.2
            );
        }
    }
    out.push_str("</g>");
    // Gauges: filled triangles; virtual gauges (constants only): hollow.
    for g in &r.map_gauges {
        let (gx, gy) = (x(g.lon), y(g.lat));
        if gx < 0.0 || gx > w || gy < 0.0 || gy > h {
            continue;
        }
        let fill = if g.virtual_gauge {
            "#ffffff"
        } else {
            "#111111"
        };
        let _ = write!(
            out,
            r##"<path class="gauge" d="M{gx:.1},{:.1}L{:.1},{:.1}L{:.1},{:.1}Z" fill="{fill}" stroke="#111" stroke-width="1.3"/><text x="{:.1}" y="{:.1}" class="glabel">{}</text>"##,
            gy - 6.0,
            gx + 5.5,
            gy + 4.0,
            gx - 5.5,
            gy + 4.0,
            gx + 8.0,
            gy + 4.0,
            esc(&g.id)
        );
    }
    for (lx, ly, id) in labels {
        let _ = write!(
            out,
            r#"<text x="{lx:.1}" y="{ly:.1}" class="zlabel">{id}</text>"#
        );
    }
    step_edges_svg(
        out,
        &r.boundary_steps,
        &|lo, la| (x(lo), y(la)),
        Some((m + 4.0, 18.0)),
    );
    // Axes in degrees.
    let lt = ticks(lon.0, lon.1, 5);
    let step_lon = if lt.len() > 1 { lt[1] - lt[0] } else { 1.0 };
    for t in &lt {
        let _ = write!(
            out,
            r##"<line x1="{0:.1}" y1="{1}" x2="{0:.1}" y2="{2}" stroke="#555"/><text x="{0:.1}" y="{3}" class="tick" text-anchor="middle">{4}</text>"##,
            x(*t),
            h - m,
            h - m + 5.0,
            h - m + 18.0,
            fmt_tick(*t, step_lon)
        );
    }
    let la = ticks(lat.0, lat.1, 5);
    let step_lat = if la.len() > 1 { la[1] - la[0] } else { 1.0 };
    for t in &la {
        let _ = write!(
            out,
            r##"<line x1="{0}" y1="{1:.1}" x2="{2}" y2="{1:.1}" stroke="#555"/><text x="{3}" y="{1:.1}" class="tick" text-anchor="end" dy="4">{4}</text>"##,
            m - 5.0,
            y(*t),
            m,
            m - 8.0,
            fmt_tick(*t, step_lat)
        );
    }
    let _ = write!(
        out,
        r#"<text x="{}" y="{}" class="axis" text-anchor="middle">Longitude (degrees east, WGS 84)</text>"#,
        w / 2.0,
        h - 12.0
    );
    let _ = write!(
        out,
        r#"<text x="14" y="{}" class="axis" text-anchor="middle" transform="rotate(-90 14 {})">Latitude (degrees north)</text>"#,
        h / 2.0,
        h / 2.0
    );
    // Scale bar (bottom left, along the meridian: the plot's y scale is s px per degree of
    // latitude) and north arrow (bottom right; the plot's y axis points north).
    let m_per_px = crate::compute::continuous::EARTH_MEAN_RADIUS_M * (1.0 / s).to_radians();
    let target_m = 0.2 * (w - 2.0 * m) * m_per_px;
    let mag = 10f64.powf(target_m.log10().floor());
    let bar_m = [10.0, 5.0, 2.0, 1.0]
        .iter()
        .map(|f| f * mag)
        .find(|v| *v <= target_m)
        .unwrap_or(mag);
    let bar_px = bar_m / m_per_px;
    let (bx, by) = (m + 12.0, h - m - 14.0);
    let label = if bar_m >= 1000.0 {
        format!("{} km", bar_m / 1000.0)
    } else {
        format!("{bar_m} m")
    };
    let _ = write!(
        out,
        r##"<g class="scalebar"><rect x="{bx}" y="{by}" width="{:.1}" height="5" fill="#111"/><rect x="{:.1}" y="{by}" width="{:.1}" height="5" fill="#fff" stroke="#111"/><text x="{bx}" y="{}" class="tick">0</text><text x="{:.1}" y="{}" class="tick" text-anchor="middle">{label}</text></g>"##,
        bar_px / 2.0,
        bx + bar_px / 2.0,
        bar_px / 2.0,
        by - 4.0,
        bx + bar_px,
        by - 4.0
    );
    let (nx, ny) = (w - m - 18.0, h - m - 48.0);
    let _ = write!(
        out,
        r##"<g class="north"><path d="M{nx},{ny}L{:.1},{:.1}L{nx},{:.1}Z" fill="#111"/><path d="M{nx},{ny}L{:.1},{:.1}L{nx},{:.1}Z" fill="#fff" stroke="#111"/><text x="{nx}" y="{:.1}" class="axis" text-anchor="middle">N</text></g>"##,
        nx + 7.0,
        ny + 26.0,
        ny + 20.0,
        nx - 7.0,
        ny + 26.0,
        ny + 20.0,
        ny - 4.0
    );
    // Legend.
    let items = [
        ("≤ 0.5", 0.4),
        ("0.5–0.8", 0.7),
        ("0.8–1.0", 0.9),
        ("1.0–1.5", 1.2),
        ("> 1.5", 2.0),
    ];
    let _ = write!(
        out,
        r##"<rect class="legend-box" x="{}" y="6" width="184" height="{}" fill="#ffffff" fill-opacity="0.9" stroke="#c8d2dc"/><text x="{}" y="20" class="tick">U95 / allowed ({})</text>"##,
        w + 2.0,
        32.0 + 16.0 * 5.0 + 58.0,
        w + 8.0,
        esc(&r.chosen_order.name)
    );
    for (i, (label, v)) in items.iter().enumerate() {
        let yy = 32.0 + 16.0 * i as f64;
        let _ = write!(
            out,
            r#"<circle cx="{}" cy="{yy}" r="5" fill="{}"/><text x="{}" y="{}" class="tick">{label}</text>"#,
            w + 18.0,
            ratio_colour(*v),
            w + 30.0,
            yy + 4.0
        );
    }
    let (lx, ly) = (w + 18.0, 32.0 + 16.0 * items.len() as f64);
    let _ = write!(
        out,
        r##"<rect x="{:.1}" y="{:.1}" width="8" height="8" fill="none" stroke="#0a3d62" stroke-width="1.3"/><text x="{:.1}" y="{:.1}" class="tick">drying height</text><path d="M{:.1},{:.1}L{:.1},{:.1}M{:.1},{:.1}L{:.1},{:.1}" stroke="#4a2040" stroke-width="1.5"/><text x="{:.1}" y="{:.1}" class="tick">not reduced</text><path d="M{lx},{:.1}L{:.1},{:.1}L{:.1},{:.1}Z" fill="#111"/><text x="{:.1}" y="{:.1}" class="tick">gauge (hollow: virtual,</text><text x="{:.1}" y="{:.1}" class="tick">constants only)</text>"##,
        lx - 4.0,
        ly - 4.0,
        lx + 12.0,
        ly + 4.0,
        lx - 4.0,
        ly + 12.0,
        lx + 4.0,
        ly + 20.0,
        lx - 4.0,
        ly + 20.0,
        lx + 4.0,
        ly + 12.0,
        lx + 12.0,
        ly + 20.0,
        ly + 27.0,
        lx + 5.0,
        ly + 36.0,
        lx - 5.0,
        ly + 36.0,
        lx + 12.0,
        ly + 36.0,
        lx + 12.0,
        ly + 50.0
    );
    out.push_str("</svg>");
}

/// `t_s` as a UTC clock time, `HH:MM`.
fn clock(t_s: f64) -> String {
    chrono::DateTime::from_timestamp(t_s.round() as i64, 0)
        .map(|d| d.format("%H:%M").to_string())
        .unwrap_or_default()
}

/// Clock ticks over `[t0, t1]`: whole hours (1, 2, 3, 6 or 12 h apart, about five).
fn clock_ticks(t0: f64, t1: f64) -> Vec<f64> {
    let span_h = (t1 - t0) / 3600.0;
    let step_h = [1.0, 2.0, 3.0, 6.0, 12.0, 24.0]
        .into_iter()
        .find(|h| span_h / h <= 6.0)
        .unwrap_or(24.0);
    let step = step_h * 3600.0;
    let mut t = (t0 / step).ceil() * step;
    let mut out = Vec::new();
    while t <= t1 {
        out.push(t);
        t += step;
    }
    out
}

/// A small panel's axis labels (`y_label` up the left, `UTC` below) and its UTC clock ticks over
/// `[t0, t1]`; `frame` is (width, height, left, right, top, bottom margins), `x` the time scale.
fn panel_axes(
    out: &mut String,
    y_label: &str,
    (w, h, ml, mr, mt, mb): (f64, f64, f64, f64, f64, f64),
    (t0, t1): (f64, f64),
    x: &dyn Fn(f64) -> f64,
) {
    let _ = write!(
        out,
        r#"<text x="11" y="{0}" class="axis" text-anchor="middle" transform="rotate(-90 11 {0})">{y_label}</text><text x="{1}" y="{2}" class="axis" text-anchor="middle">UTC</text>"#,
        (mt + h - mb) / 2.0,
        (ml + w - mr) / 2.0,
        h - 3.0
    );
    for t in clock_ticks(t0, t1) {
        let _ = write!(
            out,
            r##"<line x1="{0:.1}" y1="{1}" x2="{0:.1}" y2="{2}" stroke="#555"/><text x="{0:.1}" y="{3}" class="tick" text-anchor="middle">{4}</text>"##,
            x(t),
            h - mb,
            h - mb + 4.0,
            h - mb + 15.0,
            clock(t)
        );
    }
}

/// The instants where a zone's series has no tide, as (from, to) runs of the grid.
fn tide_gaps(s: &crate::compute::qa_report::ZoneTideSeries) -> Vec<(f64, f64)> {
    let mut gaps = Vec::new();
    let mut open: Option<f64> = None;
    for (t, v) in s.times_s.iter().zip(&s.tide_m) {
        match (v, open) {
            (None, None) => open = Some(*t),
            (Some(_), Some(a)) => {
                gaps.push((a, *t));
                open = None;
            }
            _ => {}
        }
    }
    if let (Some(a), Some(b)) = (open, s.times_s.last()) {
        gaps.push((a, *b));
    }
    gaps
}

/// Gauge sample colours in the tide panels (cycled): dark greys and browns, apart from the
/// zones' colours.
const GAUGE_COLOURS: [&str; 4] = ["#2b2b2b", "#7a5c3a", "#5a6b7b", "#8a8a8a"];

/// The tide per zone as small multiples on one scale: the zone's tide and its 95 % band, the
/// samples of the gauges feeding it (used, gap-filled, set aside by QC), and each stretch with
/// no tide shaded and labelled. A UTC clock axis.
fn tide_panels(r: &QaReport, out: &mut String) {
    let t0 = r
        .tide_series
        .iter()
        .filter_map(|s| s.times_s.first())
        .cloned()
        .fold(f64::INFINITY, f64::min);
    let t1 = r
        .tide_series
        .iter()
        .filter_map(|s| s.times_s.last())
        .cloned()
        .fold(f64::NEG_INFINITY, f64::max);
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for s in &r.tide_series {
        for (t, u) in s.tide_m.iter().zip(&s.u95_tide_m) {
            if let (Some(t), Some(u)) = (t, u) {
                lo = lo.min(t - u);
                hi = hi.max(t + u);
            }
        }
    }
    for g in &r.gauge_traces {
        for (t, h) in g.used.iter().chain(&g.flagged) {
            if *t >= t0 && *t <= t1 {
                lo = lo.min(*h);
                hi = hi.max(*h);
            }
        }
    }
    if t1.partial_cmp(&t0) != Some(std::cmp::Ordering::Greater) || !lo.is_finite() {
        out.push_str("<p>No tide over the survey period.</p>");
        return;
    }
    let (lo, hi) = (lo - 0.1, hi + 0.1);
    let (w, h, ml, mr, mt, mb) = (360.0, 190.0, 44.0, 10.0, 22.0, 34.0);
    let x = |t: f64| ml + (t - t0) / (t1 - t0) * (w - ml - mr);
    let y = |v: f64| mt + (hi - v) / (hi - lo) * (h - mt - mb);
    let date = chrono::DateTime::from_timestamp(t0.round() as i64, 0)
        .map(|d| d.format("%Y-%m-%d").to_string())
        .unwrap_or_default();
    out.push_str(r#"<div class="panels">"#);
    for (i, s) in r.tide_series.iter().enumerate() {
        let col = ZONE_COLOURS[i % ZONE_COLOURS.len()];
        let _ = write!(
            out,
            r#"<figure class="panel tide-panel"><svg class="small" viewBox="0 0 {w} {h}" role="img" aria-label="Tide in zone {0}"><text x="{ml}" y="14" class="ptitle">zone {0}</text>"#,
            esc(&s.zone)
        );
        // Gaps first, beneath everything; a label that would overlap the one before it goes a
        // row lower (about 5 px a character at the label's size).
        let mut rows_end: Vec<f64> = Vec::new();
        let mut gap_labels: Vec<String> = Vec::new();
        // The stretches found to the second when the report has them, else the grid's.
        let gaps: Vec<(f64, f64, Option<bool>)> = if s.gaps.is_empty() {
            tide_gaps(s)
                .into_iter()
                .map(|(a, b)| (a, b, None))
                .collect()
        } else {
            s.gaps.iter().map(|&(a, b, f)| (a, b, Some(f))).collect()
        };
        for (a, b, flagged) in gaps {
            let (xa, xb) = (x(a), x(b).max(x(a) + 2.0));
            let why = match flagged {
                Some(true) => " (QC)",
                Some(false) => " (gap)",
                None => "",
            };
            let text = format!("no tide {}–{}{why}", clock(a), clock(b));
            let half = 3.1 * text.chars().count() as f64;
            let cx = ((xa + xb) / 2.0).clamp(ml + half, w - mr - half);
            let row = rows_end
                .iter()
                .position(|end| *end < cx - half)
                .unwrap_or(rows_end.len());
            if row == rows_end.len() {
                rows_end.push(cx + half);
            } else {
                rows_end[row] = cx + half;
            }
            let _ = write!(
                out,
                r##"<rect class="gap" x="{xa:.1}" y="{mt}" width="{:.1}" height="{}" fill="#d9d9d9" fill-opacity="0.7"/>"##,
                xb - xa,
                h - mt - mb
            );
            // Drawn last, above the samples.
            gap_labels.push(format!(
                r#"<text x="{cx:.1}" y="{}" class="gaplabel" text-anchor="middle">{text}</text>"#,
                mt + 10.0 + 11.0 * row as f64
            ));
        }
        let yt = ticks(lo, hi, 6);
        let ys = if yt.len() > 1 { yt[1] - yt[0] } else { 1.0 };
        for v in &yt {
            let _ = write!(
                out,
                r##"<line x1="{ml}" y1="{0:.1}" x2="{1}" y2="{0:.1}" stroke="#e3e8ee"/><text x="{2}" y="{0:.1}" dy="4" class="tick" text-anchor="end">{3}</text>"##,
                y(*v),
                w - mr,
                ml - 4.0,
                fmt_tick(*v, ys)
            );
        }
        panel_axes(
            out,
            "above chart datum (m)",
            (w, h, ml, mr, mt, mb),
            (t0, t1),
            &x,
        );
        // Band and line, split where there is no tide.
        let mut runs: Vec<Vec<(f64, f64, f64)>> = vec![Vec::new()];
        for ((t, v), u) in s.times_s.iter().zip(&s.tide_m).zip(&s.u95_tide_m) {
            match (v, u) {
                (Some(v), Some(u)) => runs.last_mut().expect("one run").push((*t, *v, *u)),
                _ => {
                    if !runs.last().expect("one run").is_empty() {
                        runs.push(Vec::new());
                    }
                }
            }
        }
        for run in runs.iter().filter(|r| r.len() > 1) {
            let mut band = String::new();
            let mut line = String::new();
            for (j, (t, v, u)) in run.iter().enumerate() {
                let c = if j == 0 { "M" } else { "L" };
                let _ = write!(band, "{c}{:.1},{:.1} ", x(*t), y(v + u));
                let _ = write!(line, "{c}{:.1},{:.1} ", x(*t), y(*v));
            }
            for (t, v, u) in run.iter().rev() {
                let _ = write!(band, "L{:.1},{:.1} ", x(*t), y(v - u));
            }
            let _ = write!(
                out,
                r#"<path d="{band}Z" fill="{col}" fill-opacity="0.15" stroke="none"/><path class="tide" d="{line}" fill="none" stroke="{col}" stroke-width="1.6"/>"#
            );
        }
        // The feeding gauges' samples.
        for (k, gid) in s.gauges.iter().enumerate() {
            let Some(g) = r.gauge_traces.iter().find(|g| &g.gauge == gid) else {
                continue;
            };
            let gc = GAUGE_COLOURS[k % GAUGE_COLOURS.len()];
            let inside = |t: &f64| *t >= t0 && *t <= t1;
            for (t, v) in g.used.iter().filter(|p| inside(&p.0)) {
                let _ = write!(
                    out,
                    r#"<circle class="sample" cx="{:.1}" cy="{:.1}" r="1.3" fill="{gc}"/>"#,
                    x(*t),
                    y(*v)
                );
            }
            for (t, v) in g.filled.iter().filter(|p| inside(&p.0)) {
                let _ = write!(
                    out,
                    r##"<circle class="filled" cx="{:.1}" cy="{:.1}" r="2.6" fill="none" stroke="#2e7d32" stroke-width="1"/>"##,
                    x(*t),
                    y(*v)
                );
            }
            for (t, v) in g.flagged.iter().filter(|p| inside(&p.0)) {
                let (cx, cy) = (x(*t), y(*v));
                let _ = write!(
                    out,
                    r##"<path class="flagged" d="M{:.1},{:.1}L{:.1},{:.1}M{:.1},{:.1}L{:.1},{:.1}" stroke="#c0262d" stroke-width="1.6"/>"##,
                    cx - 3.0,
                    cy - 3.0,
                    cx + 3.0,
                    cy + 3.0,
                    cx - 3.0,
                    cy + 3.0,
                    cx + 3.0,
                    cy - 3.0
                );
            }
            // The gauges' keys, right-aligned after the title, about 6 px a character.
            let widths: Vec<f64> = s
                .gauges
                .iter()
                .map(|g| 14.0 + 6.0 * g.chars().count() as f64)
                .collect();
            let kx = w - mr - widths[k..].iter().sum::<f64>();
            let _ = write!(
                out,
                r#"<circle cx="{:.1}" cy="9" r="2.5" fill="{gc}"/><text x="{:.1}" y="13" class="tick">{}</text>"#,
                kx + 3.0,
                kx + 8.0,
                esc(gid)
            );
        }
        for l in gap_labels {
            out.push_str(&l);
        }
        out.push_str("</svg></figure>");
    }
    out.push_str("</div>");
    let _ = write!(
        out,
        r#"<p class="note">Time axis: UTC clock, {date}. Line: the zone's tide above chart datum; shaded band: ± U95 (k = 1.96). Dots: the samples of the gauges feeding the zone, at the gauge (before the zone's time corrector and range ratio); green rings: samples gap filling added; red crosses: samples quality control set aside; grey: no tide for the zone's soundings, to the minute, “(QC)” where a sample quality control set aside stops the tide, “(gap)” where a record has no sample.</p>"#
    );
}

/// Each gauge pair compared (as `ebbwise qc` compares them), its difference over the survey
/// period as small multiples.
fn difference_panels(r: &QaReport, out: &mut String) {
    let with_data: Vec<_> = r.gauge_differences.iter().filter(|d| d.n > 1).collect();
    if with_data.is_empty() {
        out.push_str("<p>No gauge pair to compare: no zone is fed by two gauges and no gauge lies in a zone fed by another, or the pairs have no common times in the survey period.</p>");
        return;
    }
    let (w, h, ml, mr, mt, mb) = (360.0, 160.0, 50.0, 10.0, 22.0, 34.0);
    out.push_str(r#"<div class="panels">"#);
    for d in with_data {
        let t0 = d.series.first().map_or(0.0, |p| p.0);
        let t1 = d.series.last().map_or(1.0, |p| p.0).max(t0 + 1.0);
        let lim = d.series.iter().map(|p| p.1.abs()).fold(0.05, f64::max) * 1.1;
        let x = |t: f64| ml + (t - t0) / (t1 - t0) * (w - ml - mr);
        let y = |v: f64| mt + (lim - v) / (2.0 * lim) * (h - mt - mb);
        let _ = write!(
            out,
            r##"<figure class="panel diff-panel"><svg class="small" viewBox="0 0 {w} {h}" role="img" aria-label="Difference {0}"><text x="{ml}" y="14" class="ptitle">{0}{1}</text><line x1="{ml}" y1="{2:.1}" x2="{3}" y2="{2:.1}" stroke="#888"/>"##,
            esc(&d.pair),
            if d.flagged { " (flagged)" } else { "" },
            y(0.0),
            w - mr
        );
        let yt = ticks(-lim, lim, 4);
        let ys = if yt.len() > 1 { yt[1] - yt[0] } else { 1.0 };
        for v in &yt {
            let _ = write!(
                out,
                r#"<text x="{}" y="{:.1}" dy="4" class="tick" text-anchor="end">{}</text>"#,
                ml - 4.0,
                y(*v),
                fmt_tick(*v, ys)
            );
        }
        panel_axes(out, "a − b (m)", (w, h, ml, mr, mt, mb), (t0, t1), &x);
        // The line breaks where the differences are more than three of their usual steps apart
        // (a gap in either record), and the gap is shaded and labelled.
        let mut steps: Vec<f64> = d.series.windows(2).map(|w| w[1].0 - w[0].0).collect();
        steps.sort_by(f64::total_cmp);
        let usual = steps.get(steps.len() / 2).copied().unwrap_or(0.0);
        let mut line = String::new();
        for (j, (t, v)) in d.series.iter().enumerate() {
            let gap = j > 0 && usual > 0.0 && t - d.series[j - 1].0 > 3.0 * usual;
            if gap {
                let (a, b) = (d.series[j - 1].0, *t);
                let _ = write!(
                    out,
                    r##"<rect class="gap" x="{:.1}" y="{mt}" width="{:.1}" height="{}" fill="#d9d9d9" fill-opacity="0.7"/><text x="{:.1}" y="{}" class="gaplabel" text-anchor="middle">no data {}–{}</text>"##,
                    x(a),
                    x(b) - x(a),
                    h - mt - mb,
                    (x(a) + x(b)) / 2.0,
                    mt + 10.0,
                    clock(a),
                    clock(b)
                );
            }
            let _ = write!(
                line,
                "{}{:.1},{:.1} ",
                if j == 0 || gap { "M" } else { "L" },
                x(*t),
                y(*v)
            );
        }
        let col = if d.flagged { "#c0262d" } else { "#1f5f8b" };
        let _ = write!(
            out,
            r#"<path class="difference" d="{line}" fill="none" stroke="{col}" stroke-width="1.3"/></svg><figcaption>{} − {}: mean {:+.3} m, largest |a − b| {:.3} m over {} samples{}</figcaption></figure>"#,
            esc(&d.a),
            esc(&d.b),
            d.mean_m,
            d.max_abs_m,
            d.n,
            if d.findings.is_empty() {
                String::new()
            } else {
                format!("; {}", esc(&d.findings.join("; ")))
            }
        );
    }
    out.push_str("</div><p class=\"note\">Difference a − b in metres (y), UTC clock (x), over the survey period; `ebbwise qc` writes the whole records' differences and judges them.</p>");
}

fn budget_svg(r: &QaReport, out: &mut String) {
    let rows: Vec<(&str, Vec<f64>)> = std::iter::once(&r.survey)
        .chain(r.zones.iter())
        .filter_map(|g| {
            g.budget.as_ref().filter(|b| b.soundings > 0).map(|b| {
                (
                    g.id.as_str(),
                    b.components.iter().map(|c| c.mean_share).collect(),
                )
            })
        })
        .collect();
    let (w, ml, mr, bar, gap) = (720.0, 80.0, 30.0, 22.0, 10.0);
    let h = 70.0 + rows.len() as f64 * (bar + gap) + 40.0;
    let x = |s: f64| ml + s * (w - ml - mr);
    let _ = write!(
        out,
        r#"<svg class="plot" viewBox="0 0 {w} {h}" role="img" aria-labelledby="budget-title"><title id="budget-title">Mean share of each component of u_tvu squared, per zone</title>"#
    );
    for (i, (id, shares)) in rows.iter().enumerate() {
        let yy = 20.0 + i as f64 * (bar + gap);
        let mut acc = 0.0;
        for (k, s) in shares.iter().enumerate() {
            let _ = write!(
                out,
                r#"<rect x="{:.1}" y="{yy}" width="{:.1}" height="{bar}" fill="{}"><title>{}: {}</title></rect>"#,
                x(acc),
                s * (w - ml - mr),
                COMPONENT_COLOURS[k],
                BUDGET_COMPONENTS[k],
                pct(*s)
            );
            acc += s;
        }
        let _ = write!(
            out,
            r#"<text x="{}" y="{}" class="tick" text-anchor="end">{}</text>"#,
            ml - 6.0,
            yy + bar / 2.0 + 4.0,
            esc(id)
        );
    }
    let base = 20.0 + rows.len() as f64 * (bar + gap);
    for t in [0.0, 0.25, 0.5, 0.75, 1.0] {
        let _ = write!(
            out,
            r##"<line x1="{0:.1}" y1="{1}" x2="{0:.1}" y2="{2}" stroke="#555"/><text x="{0:.1}" y="{3}" class="tick" text-anchor="middle">{4:.0}</text>"##,
            x(t),
            base,
            base + 5.0,
            base + 18.0,
            100.0 * t
        );
    }
    let _ = write!(
        out,
        r#"<text x="{}" y="{}" class="axis" text-anchor="middle">Mean share of u_tvu² (%)</text>"#,
        (ml + w - mr) / 2.0,
        base + 34.0
    );
    for (k, name) in BUDGET_COMPONENTS.iter().enumerate() {
        let xx = ml + k as f64 * 100.0;
        let _ = write!(
            out,
            r#"<rect x="{xx}" y="{}" width="12" height="12" fill="{}"/><text x="{}" y="{}" class="tick">{name}</text>"#,
            base + 44.0,
            COMPONENT_COLOURS[k],
            xx + 16.0,
            base + 54.0
        );
    }
    out.push_str("</svg>");
}

fn histogram_svg(r: &QaReport, out: &mut String) {
    let (w, h, ml, mr, mt, mb) = (720.0, 300.0, 70.0, 20.0, 20.0, 50.0);
    let c = &r.ratio_histogram.counts;
    let bw = r.ratio_histogram.bin_width;
    let max = c.iter().cloned().max().unwrap_or(0).max(1) as f64;
    let xmax = c.len() as f64 * bw;
    let x = |v: f64| ml + v / xmax * (w - ml - mr);
    let y = |n: f64| mt + (1.0 - n / max) * (h - mt - mb);
    let _ = write!(
        out,
        r#"<svg class="plot" viewBox="0 0 {w} {h}" role="img" aria-labelledby="hist-title"><title id="hist-title">Histogram of U95 TVU over allowed TVU</title>"#
    );
    for (i, n) in c.iter().enumerate() {
        if *n == 0 {
            continue;
        }
        let r0 = i as f64 * bw;
        let _ = write!(
            out,
            r#"<rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="{}"><title>{:.2}–{:.2}: {n}</title></rect>"#,
            x(r0),
            y(*n as f64),
            (x(r0 + bw) - x(r0) - 0.5).max(0.5),
            h - mb - y(*n as f64),
            ratio_colour(r0 + bw / 2.0),
            r0,
            r0 + bw
        );
    }
    let _ = write!(
        out,
        r##"<line x1="{0:.1}" y1="{mt}" x2="{0:.1}" y2="{1}" stroke="#222" stroke-dasharray="5 4"/><text x="{2:.1}" y="{3}" class="tick">limit</text>"##,
        x(1.0),
        h - mb,
        x(1.0) + 4.0,
        mt + 10.0
    );
    for t in ticks(0.0, xmax, 6) {
        let _ = write!(
            out,
            r##"<line x1="{0:.1}" y1="{1}" x2="{0:.1}" y2="{2}" stroke="#555"/><text x="{0:.1}" y="{3}" class="tick" text-anchor="middle">{4:.1}</text>"##,
            x(t),
            h - mb,
            h - mb + 5.0,
            h - mb + 18.0,
            t
        );
    }
    let yt = ticks(0.0, max, 4);
    for t in &yt {
        let _ = write!(
            out,
            r##"<text x="{}" y="{:.1}" dy="4" class="tick" text-anchor="end">{:.0}</text>"##,
            ml - 6.0,
            y(*t),
            t
        );
    }
    let _ = write!(
        out,
        r#"<text x="{}" y="{}" class="axis" text-anchor="middle">U95 TVU / allowed TVU for order {} (bins closed on the right; the last holds all above {:.2})</text>"#,
        (ml + w - mr) / 2.0,
        h - 10.0,
        esc(&r.chosen_order.name),
        xmax - bw
    );
    let _ = write!(
        out,
        r#"<text x="16" y="{0}" class="axis" text-anchor="middle" transform="rotate(-90 16 {0})">Soundings</text>"#,
        (mt + h - mb) / 2.0
    );
    out.push_str("</svg>");
}

/// Whether quality control ran on the gauge records, and per gauge how many samples it set
/// aside.
fn push_qc(o: &mut String, r: &QaReport) {
    if r.qc_ran {
        o.push_str(r#"<p class="qc">Gauge quality control <b>ran</b>: no tide is interpolated across a sample it set aside.</p>"#);
    } else {
        o.push_str(r#"<p class="qc fail">Gauge quality control <b>did not run</b> (<code>[qc] enabled = false</code>): reversed or repeated times and spikes in the gauge records reach the soundings unchecked.</p>"#);
    }
    o.push_str("<table><tr><th>gauge</th><th>samples</th><th>set aside by QC</th></tr>");
    for g in &r.qc_gauges {
        let set_aside = g
            .set_aside
            .map_or_else(|| "not checked".to_string(), |n| n.to_string());
        let _ = write!(
            o,
            "<tr><td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(&g.gauge),
            g.samples,
            set_aside
        );
    }
    o.push_str("</table>");
}

/// Every sounding of the run by status, and the exports of the failing and unreduced ones.
fn push_status_table(o: &mut String, r: &QaReport) {
    o.push_str(r#"<table class="status"><thead><tr><th>status</th><th>soundings</th><th>share of all</th></tr></thead><tbody>"#);
    let total = r.rows_by_status.total().max(1) as f64;
    for (s, n) in r.rows_by_status.iter() {
        let share = 100.0 * n as f64 / total;
        let shown = if n > 0 && share < 0.05 {
            "&lt; 0.1 %".to_string()
        } else {
            format!("{share:.1} %")
        };
        let _ = write!(o, "<tr><td>{s}</td><td>{n}</td><td>{shown}</td></tr>");
    }
    let _ = write!(
        o,
        "<tr><th>all</th><th>{}</th><th>100.0 %</th></tr></tbody></table>",
        r.rows_by_status.total()
    );
    if !r.exports.is_empty() {
        o.push_str(r#"<p class="exports">For a GIS, beside the chart (GeoJSON, longitude/latitude WGS 84, one feature per sounding with its file, row, line, status and reason): "#);
        for (i, e) in r.exports.iter().enumerate() {
            let _ = write!(
                o,
                r#"{}<a href="{f}">{f}</a>"#,
                if i > 0 { " · " } else { "" },
                f = esc(e)
            );
        }
        o.push_str("</p>");
    }
}

/// A group's counts by status as table cells.
fn status_cells(o: &mut String, g: &crate::compute::qa::GroupSummary) {
    for (_, n) in g.by_status.iter() {
        let _ = write!(o, "<td>{n}</td>");
    }
}

/// The cells both count tables share after the status counts: judged, within (of judged, of
/// all), drying heights, worst and P95 U95/allowed.
fn judged_cells(o: &mut String, g: &crate::compute::qa::GroupSummary) {
    let _ = write!(
        o,
        r#"<td>{}</td><td data-sort="{}">{}</td><td data-sort="{}">{}</td><td>{}</td><td data-sort="{}">{}</td><td>{}</td>"#,
        g.soundings,
        g.share_within_chosen,
        if g.soundings > 0 {
            pct(g.share_within_chosen)
        } else {
            "–".to_string()
        },
        g.share_within_of_all,
        pct(g.share_within_of_all),
        g.drying_heights,
        g.max_ratio_chosen.unwrap_or(0.0),
        g.max_ratio_chosen.map_or_else(|| "–".to_string(), ratio),
        if g.soundings > 0 {
            ratio(g.p95_ratio_chosen)
        } else {
            "–".to_string()
        }
    );
}

fn count_headings(o: &mut String, first: &str, extra: &[&str]) {
    let _ = write!(o, "<thead><tr><th>{first}</th>");
    for h in extra {
        let _ = write!(o, "<th>{h}</th>");
    }
    o.push_str("<th>all</th>");
    for st in crate::compute::reduce::SoundingStatus::ALL {
        // The status words may break after their underscores, to keep the table narrow.
        let _ = write!(o, "<th>{}</th>", st.as_str().replace('_', "_<wbr>"));
    }
    o.push_str("<th>judged</th><th>within, of judged</th><th>within, of all</th><th>drying heights</th><th>worst U95/<wbr>allowed</th><th>P95 U95/<wbr>allowed</th>");
}

/// Defaulted inputs as the zone table names them: `gauge A: u_gauge_m` → `A u_gauge_m`.
fn short_defaults(d: &[String]) -> String {
    d.iter()
        .map(|x| {
            x.split_once(": ")
                .map(|(who, k)| {
                    format!(
                        "{} {k}",
                        who.trim_start_matches("zone ").trim_start_matches("gauge ")
                    )
                })
                .unwrap_or_else(|| x.clone())
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// The zones: every sounding by status, the shares within, drying heights, and the inputs
/// that fell back to defaults (marked); a last row for the soundings in no zone.
fn push_zone_table(o: &mut String, r: &QaReport) {
    let _ = write!(
        o,
        "<h2>Zones</h2><p class=\"lead\">Every sounding by status; “within” is within order {}'s TVU limit, of those judged and of all soundings (those not reduced count as not within). <span class=\"mark\">†</span> marks a zone whose tide uncertainty uses a default value (listed in the last column): its verdict rests on the project's defaults, not on a measured value. <span class=\"mark\">*</span> marks a verdict on the judged soundings only, where the zone also has soundings not reduced: they meet no order until they are reduced.</p>",
        esc(&r.chosen_order.name)
    );
    o.push_str(r#"<div class="wide"><table class="counts zones">"#);
    count_headings(o, "zone", &[]);
    o.push_str("<th>strictest order met</th><th>meets chosen</th><th>default inputs</th></tr></thead><tbody>");
    for g in &r.zones {
        let yn = if g.meets_chosen { "yes" } else { "no" };
        let _ = write!(
            o,
            r#"<tr><td>{}{}</td><td>{}</td>"#,
            esc(&g.id),
            default_mark(g),
            g.all_soundings
        );
        status_cells(o, g);
        judged_cells(o, g);
        let star = partial_mark(g);
        let _ = write!(
            o,
            r#"<td>{}{star}</td><td class="{yn}">{yn}{star}</td><td class="mark defaults">{}</td></tr>"#,
            g.strictest_order_met.as_deref().unwrap_or("none"),
            esc(&short_defaults(&g.defaulted_inputs))
        );
    }
    let nz = &r.no_zone;
    let _ = write!(o, "<tr><td>(in no zone)</td><td>{}</td>", nz.total());
    for (_, n) in nz.iter() {
        let _ = write!(o, "<td>{n}</td>");
    }
    o.push_str(r#"<td>0</td><td colspan="8" class="left">outside the zoning, or a row that could not be read</td></tr>"#);
    let _ = write!(o, "<tr><th>survey</th><th>{}</th>", r.survey.all_soundings);
    for (_, n) in r.survey.by_status.iter() {
        let _ = write!(o, "<th>{n}</th>");
    }
    let g = &r.survey;
    let _ = write!(
        o,
        "<th>{}</th><th>{}</th><th>{}</th><th>{}</th><th>{}</th><th>{}</th><th>{}{star}</th><th>{}{star}</th><th></th></tr></tbody></table></div>",
        g.soundings,
        pct(g.share_within_chosen),
        pct(g.share_within_of_all),
        g.drying_heights,
        g.max_ratio_chosen.map_or_else(|| "–".to_string(), ratio),
        ratio(g.p95_ratio_chosen),
        g.strictest_order_met.as_deref().unwrap_or("none"),
        if g.meets_chosen { "yes" } else { "no" },
        star = partial_mark(g)
    );
}

/// `*` after a verdict on a group that also has soundings not reduced (the verdict is on the
/// judged ones only).
fn partial_mark(g: &crate::compute::qa::GroupSummary) -> &'static str {
    if g.all_soundings > g.soundings {
        r#"<span class="mark">*</span>"#
    } else {
        ""
    }
}

/// `†` after the id of a group whose tide uncertainty uses a default value.
fn default_mark(g: &crate::compute::qa::GroupSummary) -> &'static str {
    if g.defaulted_inputs.is_empty() {
        ""
    } else {
        r#"<span class="mark"> †</span>"#
    }
}

/// A line's time span: `2026-06-14 07:33:40–08:03:28`, the end's date only when it differs.
fn utc_span(first: Option<&str>, last: Option<&str>) -> String {
    match (first, last) {
        (Some(a), Some(b)) => {
            let (a, b) = (compact_utc(Some(a)), compact_utc(Some(b)));
            match (a.split_once(' '), b.split_once(' ')) {
                (Some((da, _)), Some((db, tb))) if da == db => format!("{a}–{tb}"),
                _ => format!("{a} – {b}"),
            }
        }
        _ => "–".to_string(),
    }
}

/// An ISO 8601 UTC label as the lines table shows it, to the second: `2026-06-14 07:33:40`.
fn compact_utc(t: Option<&str>) -> String {
    match t {
        Some(t) => t.get(..19).unwrap_or(t).replacen('T', " ", 1),
        None => "–".to_string(),
    }
}

/// The survey lines, the unit a crew re-runs: sortable (click a heading), worst first.
fn push_line_table(o: &mut String, r: &QaReport) {
    let _ = write!(
        o,
        "<h2>Survey lines</h2><p class=\"lead\">{} lines, the least share within order {} of all their soundings first; click a heading to sort. A file without a line column is one line, named by the file; a row that names no line counts on “(no line in FILE)”, an unreadable row on the line its line field names. † and * as in the zones table: a line crossing a zone on default values, a verdict on the judged soundings only.</p>",
        r.lines.len(),
        esc(&r.chosen_order.name)
    );
    let mut lines: Vec<&crate::compute::qa_report::LineSummary> = r.lines.iter().collect();
    lines.sort_by(|a, b| {
        a.group
            .share_within_of_all
            .total_cmp(&b.group.share_within_of_all)
            .then_with(|| a.group.id.cmp(&b.group.id))
    });
    o.push_str(r#"<div class="wide"><table class="counts lines sortable long">"#);
    count_headings(o, "line", &["file", "UTC span", "zones"]);
    o.push_str("<th>dominant component</th><th>meets chosen</th></tr></thead><tbody>");
    for l in lines {
        let g = &l.group;
        let yn = if g.meets_chosen { "yes" } else { "no" };
        let _ = write!(
            o,
            "<tr><td>{}{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td>",
            esc(&g.id),
            default_mark(g),
            esc(&l.files.join(", ")),
            esc(&utc_span(l.first_utc.as_deref(), l.last_utc.as_deref())),
            esc(&l.zones_crossed.join(", ")),
            g.all_soundings
        );
        status_cells(o, g);
        judged_cells(o, g);
        let _ = write!(
            o,
            r#"<td>{}</td><td class="{yn}">{yn}{}</td></tr>"#,
            g.budget.as_ref().map_or("none", |b| b.dominant_component),
            partial_mark(g)
        );
    }
    o.push_str("</tbody></table></div>");
}

/// The budget per zone in metres and shares.
fn push_budget_table(o: &mut String, r: &QaReport) {
    o.push_str(r#"<p>Per component: the root mean square of its standard uncertainty over the zone's judged soundings in metres (1σ), its mean share of u_tvu² and the 95th percentile of that share.</p><div class="wide"><table class="counts budget"><thead><tr><th>zone</th><th>judged</th><th>RMS u_tvu (m)</th>"#);
    for c in BUDGET_COMPONENTS {
        let _ = write!(o, "<th>{c}: RMS (m) · mean · P95 share</th>");
    }
    o.push_str("<th>dominant</th></tr></thead><tbody>");
    for g in std::iter::once(&r.survey).chain(r.zones.iter()) {
        if let Some(b) = &g.budget {
            let _ = write!(
                o,
                "<tr><td>{}</td><td>{}</td><td>{:.4}</td>",
                esc(&g.id),
                b.soundings,
                b.rms_u_tvu_m
            );
            for c in &b.components {
                let _ = write!(
                    o,
                    "<td>{:.4} · {} · {}</td>",
                    c.rms_m,
                    pct(c.mean_share),
                    c.p95_share.map_or_else(|| "–".to_string(), pct)
                );
            }
            let _ = write!(o, "<td>{}</td></tr>", b.dominant_component);
        }
    }
    o.push_str("</tbody></table></div>");
}

/// Where the numbers came from: the tool, the time, every input file's SHA-256, QC, defaults.
fn push_provenance(o: &mut String, r: &QaReport) {
    let p = &r.provenance;
    let _ = write!(
        o,
        r#"<h2>Where the numbers came from</h2><table class="provenance"><tbody><tr><td>tool</td><td>ebbwise {}</td></tr><tr><td>report made (UTC)</td><td>{}</td></tr><tr><td>project file</td><td>{}</td></tr><tr><td>tide model</td><td>{}</td></tr></tbody></table>"#,
        esc(p.ebbwise_version),
        esc(&p.created_utc),
        esc(&p.project_file),
        esc(r.tide_model)
    );
    o.push_str(r#"<div class="wide"><table class="inputs long"><thead><tr><th>input</th><th>path</th><th>SHA-256</th></tr></thead><tbody>"#);
    for f in &p.inputs {
        let _ = write!(
            o,
            r#"<tr><td>{}</td><td>{}</td><td><code class="hash">{}</code></td></tr>"#,
            esc(&f.role),
            esc(&f.path),
            esc(&f.sha256)
        );
    }
    o.push_str("</tbody></table></div>");
    push_qc(o, r);
    if r.inputs.defaulted.is_empty() {
        o.push_str("<p>No uncertainty input fell back to a default: every gauge and zone sets its own.</p>");
    } else {
        let _ = write!(
            o,
            r#"<p class="defaults"><b>Uncertainty inputs on the project's default values</b> (demo values unless the project sets them; the zones and lines they reach are marked above): {}.</p>"#,
            esc(&r.inputs.defaulted.join("; "))
        );
    }
}

/// Sorts a `table.sortable` by the clicked column (numbers by value, from `data-sort` where a
/// cell has it); the page reads the same without it.
const SORT_SCRIPT: &str = "<script>document.querySelectorAll('table.sortable').forEach(function(t){t.querySelectorAll('thead th').forEach(function(th,i){th.addEventListener('click',function(){var b=t.tBodies[0],rows=Array.prototype.slice.call(b.rows),asc=th.getAttribute('data-dir')!=='asc';th.setAttribute('data-dir',asc?'asc':'desc');function key(r){var c=r.cells[i];return c.hasAttribute('data-sort')?c.getAttribute('data-sort'):c.textContent;}rows.sort(function(x,y){var a=key(x),c=key(y),na=parseFloat(a),nc=parseFloat(c),d=(!isNaN(na)&&!isNaN(nc))?na-nc:a.localeCompare(c);return asc?d:-d;});rows.forEach(function(r){b.appendChild(r);});});});});</script>";

/// What the verdict does not cover: the soundings not reduced, and the zones whose verdict
/// rests on default uncertainty values.
fn verdict_caveats(r: &QaReport) -> String {
    let mut out = String::new();
    let not_reduced = r.survey.all_soundings.saturating_sub(r.survey.soundings);
    if not_reduced > 0 {
        let _ = write!(
            out,
            "<p><b>Every verdict judges the reduced soundings only:</b> the {not_reduced} not reduced have no depth on chart datum and meet no order until they are reduced (with the gauge data they lack, gap filling or a correction file); zones and lines that have such soundings are marked * below.</p>"
        );
    }
    let on_defaults: Vec<&str> = r
        .zones
        .iter()
        .filter(|z| !z.defaulted_inputs.is_empty())
        .map(|z| z.id.as_str())
        .collect();
    if !on_defaults.is_empty() {
        let _ = write!(
            out,
            "<p><b>On default uncertainty values</b> (marked † below): zone{} {} — {} verdict rests on the project's defaults, not on measured values.</p>",
            if on_defaults.len() > 1 { "s" } else { "" },
            esc(&on_defaults.join(", ")),
            if on_defaults.len() > 1 { "their" } else { "its" }
        );
    }
    out
}

/// Renders the report as one HTML page.
pub fn render_html(r: &QaReport) -> String {
    let mut o = String::with_capacity(256 * 1024);
    let achieved = r
        .achieved_order
        .as_deref()
        .unwrap_or("none of the built-in orders");
    let _ = write!(
        o,
        r#"<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>QA report — {name}</title>
<style>
body {{ font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; margin: 0; color: #1d2a36; background: #fff; }}
header {{ background: #12324d; color: #fff; padding: 18px 28px; }}
header h1 {{ margin: 0 0 4px; font-size: 22px; }}
main {{ padding: 8px 28px 40px; max-width: 1400px; }}
.verdict {{ font-size: 18px; padding: 12px 16px; border-left: 6px solid #2e8b57; background: #eef7f1; margin: 16px 0; }}
.verdict.fail {{ border-color: #c0262d; background: #fbeeee; }}
p.qc.fail {{ color: #c0262d; }}
.caution {{ font-size: 13px; background: #fff7e0; border: 1px solid #e9c46a; padding: 8px 12px; }}
table {{ border-collapse: collapse; margin: 8px 0 18px; font-size: 13px; }}
th, td {{ border-bottom: 1px solid #dde3ea; padding: 4px 10px; text-align: right; }}
th:first-child, td:first-child {{ text-align: left; }}
th {{ background: #f0f4f8; }}
td.no {{ color: #c0262d; font-weight: bold; }} td.yes {{ color: #1b7f4c; }}
svg.plot {{ width: 100%; max-width: 760px; height: auto; display: block; margin: 6px 0 18px; background: #fff; }} svg.plot.map {{ max-width: 960px; }}
svg .tick {{ font-size: 11px; fill: #2c3e50; }} svg .axis {{ font-size: 12px; fill: #1d2a36; }}
svg .steplabel {{ font-size: 11px; font-weight: bold; fill: #111; paint-order: stroke; stroke: #fff; stroke-width: 3px; stroke-linejoin: round; }}
svg .zlabel {{ font-size: 13px; font-weight: bold; fill: #12324d; text-anchor: middle; paint-order: stroke; stroke: #fff; stroke-width: 4px; stroke-linejoin: round; }}
h2 {{ margin-top: 28px; border-bottom: 2px solid #12324d; padding-bottom: 3px; font-size: 18px; }}
.wide {{ overflow-x: auto; }} table.counts {{ font-size: 12px; }} table.counts td, table.counts th {{ padding: 3px 5px; }} table.counts td {{ white-space: nowrap; }} table.lines {{ font-size: 11.5px; }}
table.sortable th {{ cursor: pointer; }} table.sortable th::after {{ content: " ⇅"; color: #8a99a8; font-size: 10px; }}
td.mark, span.mark {{ color: #b35900; font-weight: bold; }} table.counts td.defaults {{ white-space: normal; min-width: 180px; text-align: left; }} td.left {{ text-align: left; }}
table.lines td:nth-child(-n+3) {{ white-space: nowrap; }} table.counts th {{ vertical-align: bottom; }} code.hash {{ font-size: 11px; word-break: break-all; }}
.panels {{ display: grid; grid-template-columns: repeat(auto-fill, minmax(340px, 1fr)); gap: 8px 14px; }}
figure.panel {{ margin: 0; }} figure.panel figcaption {{ font-size: 12px; color: #34495e; }}
svg.small {{ width: 100%; height: auto; display: block; background: #fff; border: 1px solid #e3e8ee; }}
svg .ptitle {{ font-size: 12px; font-weight: bold; fill: #12324d; }} svg .gaplabel {{ font-size: 10px; fill: #333; paint-order: stroke; stroke: #fff; stroke-width: 3px; stroke-linejoin: round; }}
svg .glabel {{ font-size: 11px; font-weight: bold; fill: #111; paint-order: stroke; stroke: #fff; stroke-width: 3px; }}
p.note {{ font-size: 12px; color: #34495e; }}
@media print {{
  @page {{ size: A4; margin: 14mm 12mm; }}
  body {{ font-size: 10.5pt; }} header {{ background: #fff; color: #12324d; border-bottom: 2px solid #12324d; padding: 0 0 6px; }}
  main {{ padding: 0; max-width: none; }}
  h2 {{ break-after: avoid; page-break-after: avoid; margin-top: 14px; }}
  h2 + * {{ break-before: avoid; page-break-before: avoid; }}
  table, svg, figure, .verdict, .caution {{ break-inside: avoid; page-break-inside: avoid; }}
  table.long {{ break-inside: auto; page-break-inside: auto; }} tr {{ break-inside: avoid; page-break-inside: avoid; }}
  thead {{ display: table-header-group; }}
  .wide {{ overflow: visible; }} table.counts {{ font-size: 6.5pt; }} table.counts td, table.counts th {{ padding: 2px 3px; }}
  code.hash {{ font-size: 7pt; }} p.lead {{ break-after: avoid; page-break-after: avoid; }}
  figure.panel {{ min-width: 0; }} svg.small {{ box-sizing: border-box; }}
  .panels {{ grid-template-columns: 1fr 1fr; }} table.sortable th::after {{ content: ""; }}
  * {{ -webkit-print-color-adjust: exact; print-color-adjust: exact; }}
}}
</style></head><body>
<header><h1>Reduction QA report</h1><div>{name} · ebbwise {ver} · report layout {schema}</div></header>
<main>
<p class="caution">{caution}</p>
"#,
        name = esc(&r.project_name),
        ver = r.ebbwise_version,
        schema = r.schema,
        caution = esc(r.caution)
    );
    let fail = !r.survey.meets_chosen;
    // Every sounding of the day counted: those judged (reduced) and those that could not be.
    let (within, total) = r.within_chosen_of_all();
    let _ = write!(
        o,
        r#"<div class="verdict{}"><p>Of the day's <b>{total}</b> soundings, <b>{}</b> were reduced and judged ({} not reduced: see the status table below). <b>{within}</b> of them have a 95 % TVU within the limit of order <b>{}</b>: {} of those judged, {} of all soundings.</p><p>Acceptance: at least {} of the judged soundings within the limit, the project's rule (<code>acceptance_share</code>, or the authority's), not the standard's (IHO S-44 applies the limit to each sounding's 95 % TVU, as the within_order column does) — <b>{}</b>. Strictest order met, judged on the TVU limit alone: <b>{}</b> (orders 1a and 1b share their TVU limit; horizontal uncertainty, feature detection and coverage are not assessed here). Dominant component of u_tvu²: <b>{}</b>.</p><p>Drying heights (a reduced depth below zero, above chart datum): <b>{}</b>, marked on the map.</p>{}</div>"#,
        if fail { " fail" } else { "" },
        r.survey.soundings,
        total.saturating_sub(r.survey.soundings),
        esc(&r.chosen_order.name),
        pct(r.survey.share_within_chosen),
        pct(r.share_within_of_all()),
        pct_given(r.acceptance_share),
        if fail { "not met" } else { "met" },
        esc(achieved),
        esc(&r.dominant_component),
        r.survey.drying_heights,
        verdict_caveats(r)
    );
    push_status_table(&mut o, r);
    o.push_str("<h2>Survey orders</h2><table><tr><th>order</th><th>a (m, 95 %)</th><th>b (95 %)</th><th>THU (95 %)</th><th>soundings within</th><th>share within</th><th>TVU limit met</th></tr>");
    for (ord, sh) in r.orders.iter().zip(&r.survey.orders) {
        let _ = write!(
            o,
            r#"<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class="{}">{}</td></tr>"#,
            esc(&ord.name),
            given(ord.a_m),
            given(ord.b),
            esc(&ord.thu_max95),
            sh.soundings_within,
            pct(sh.share_within),
            if sh.met { "yes" } else { "no" },
            if sh.met { "yes" } else { "no" }
        );
    }
    o.push_str("</table><p>Allowed TVU at 95 %: sqrt(a² + (b·d)²) with d the reduced depth (0 for drying heights), IHO S-44 Edition 6.1.0 Table 1. Orders 1a and 1b share their TVU limit and differ in feature detection and coverage.</p>");
    o.push_str("<h2>Map: every sounding, coloured by U95 / allowed</h2>");
    map_svg(r, &mut o);
    let _ = write!(
        o,
        r#"<p class="note">Thinned to one map cell about 3 px wide ({} cells across the zoning's longer side): each cell shows its judged sounding with the <b>worst</b> U95/allowed, and, where the cell has them, a drying height (square) and a sounding not reduced (cross), so no failing, drying or unreduced sounding is hidden by the thinning. Every sounding is in the counts and, failing or unreduced, in the GeoJSON exports.</p>"#,
        r.map_cells_across
    );
    push_zone_table(&mut o, r);
    push_line_table(&mut o, r);
    let _ = write!(
        o,
        "<h2>Zones and lines that fail order {}</h2>",
        esc(&r.chosen_order.name)
    );
    if r.failing_zones.is_empty() && r.failing_lines.is_empty() {
        o.push_str("<p>None.</p>");
    } else {
        o.push_str(r#"<table class="failing long"><thead><tr><th>zone / line</th><th>all soundings</th><th>judged</th><th>within, of judged</th><th>short of acceptance by</th><th>P95 of U95/allowed</th></tr></thead><tbody>"#);
        for f in r
            .failing_zones
            .iter()
            .map(|f| ("zone", f))
            .chain(r.failing_lines.iter().map(|f| ("line", f)))
        {
            let _ = write!(
                o,
                "<tr><td>{} {}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
                f.0,
                esc(&f.1.id),
                f.1.all_soundings,
                f.1.soundings,
                if f.1.soundings > 0 {
                    pct(f.1.share_within)
                } else {
                    "nothing judged".to_string()
                },
                pct(f.1.shortfall),
                if f.1.soundings > 0 {
                    ratio(f.1.p95_ratio)
                } else {
                    "–".to_string()
                }
            );
        }
        o.push_str("</tbody></table>");
    }
    o.push_str("<h2>Tide per zone and its 95 % band</h2>");
    tide_panels(r, &mut o);
    o.push_str("<h2>Gauge differences</h2>");
    difference_panels(r, &mut o);
    o.push_str("<h2>Zone-boundary steps</h2>");
    if r.inputs.tide_field.is_some() {
        o.push_str("<p>The tide is continuous between the gauges ([tide_field]): two soundings either side of a zone edge get the same tide, so the zoning leaves no step in the reduced seabed. The zones bound the survey area and group the soundings for this report only.</p>");
    } else if r.boundary_steps.is_empty() {
        o.push_str("<p>No two zones share an edge, or no zone had a tide.</p>");
    } else {
        o.push_str("<p>Where two zones share an edge, the tide each gives at the same instant differs: soundings on either side are reduced with different tides, a step of the same size in the reduced seabed along the edge. Over the survey period, every 5 minutes; the step is the second zone's tide minus the first's. Largest first.</p>");
        o.push_str(r#"<table class="boundary-steps"><tr><th>zones</th><th>shared edge (m)</th><th>largest step (m)</th><th>at (UTC)</th><th>RMS step (m)</th><th>instants</th></tr>"#);
        for b in &r.boundary_steps {
            let _ = write!(
                o,
                "<tr><td>{} | {}</td><td>{:.0}</td><td>{:+.3}</td><td>{}</td><td>{:.3}</td><td>{}</td></tr>",
                esc(&b.zone_a),
                esc(&b.zone_b),
                b.shared_m,
                b.max_step_m,
                esc(&b.max_at_utc),
                b.rms_step_m,
                b.instants
            );
        }
        o.push_str("</table>");
        o.push_str("<p>In the reduced soundings (reduced depth = observed depth − tide, so with step = tide_b − tide_a a seabed point on the edge has depth_b − depth_a = −step), the worst edges, also drawn on the map above coloured by their largest step:</p>");
        o.push_str(r#"<table class="boundary-depth-steps"><tr><th>edge</th><th>depth step (m)</th><th>at (UTC)</th><th>in the reduced soundings</th></tr>"#);
        for (i, b) in r.boundary_steps.iter().take(3).enumerate() {
            let d = b.max_depth_step_m;
            let way = if d > 0.0 {
                "deeper"
            } else if d < 0.0 {
                "shallower"
            } else {
                "the same"
            };
            let _ = write!(
                o,
                "<tr><td>{}. {} | {}</td><td>{:+.3}</td><td>{}</td><td>a seabed point on the edge reduced from {} reads {:.3} m {way} than from {}</td></tr>",
                i + 1,
                esc(&b.zone_a),
                esc(&b.zone_b),
                d,
                esc(&b.max_at_utc),
                esc(&b.zone_b),
                d.abs(),
                esc(&b.zone_a)
            );
        }
        o.push_str("</table>");
    }
    o.push_str("<h2>Uncertainty budget per zone</h2>");
    budget_svg(r, &mut o);
    push_budget_table(&mut o, r);
    o.push_str("<h2>U95 / allowed</h2>");
    histogram_svg(r, &mut o);
    // `†` after an input that fell back to the project's default.
    let dflt = |who: &str, key: &str| -> &'static str {
        if r.inputs
            .defaulted
            .iter()
            .any(|d| *d == format!("{who}: {key}"))
        {
            r#"<span class="mark"> †</span>"#
        } else {
            ""
        }
    };
    o.push_str("<h2>Uncertainty inputs (standard, 1σ)</h2><table><tr><th>gauge</th><th>u_gauge (m)</th><th>u_datum (m)</th></tr>");
    for g in &r.inputs.gauges {
        let _ = write!(
            o,
            "<tr><td>{}</td><td>{}{}</td><td>{}{}</td></tr>",
            esc(&g.gauge),
            given(g.u_gauge_m),
            dflt(&format!("gauge {}", g.gauge), "u_gauge_m"),
            given(g.u_datum_m),
            dflt(&format!("gauge {}", g.gauge), "u_datum_m")
        );
    }
    o.push_str("</table>");
    if let Some(f) = &r.inputs.tide_field {
        let _ = write!(
            o,
            "<table class=\"tide-field\"><tr><th>continuous tide ({})</th><th>value</th></tr><tr><td>dominant constituent</td><td>{}</td></tr><tr><td>u_field (m) at {} km between stations</td><td>{}</td></tr><tr><td>u_station_range_ratio</td><td>{}</td></tr><tr><td>u_station_time (min)</td><td>{}</td></tr><tr><td>stations</td><td>{}</td></tr><tr><td>gauges blended</td><td>{}</td></tr></table>",
            esc(f.mode),
            esc(f.dominant),
            given(f.field_scale_km),
            given(f.u_field_m),
            given(f.u_station_range_ratio),
            given(f.u_station_time_min),
            esc(&f.stations.join(", ")),
            esc(&f.blended_gauges.join(", "))
        );
    } else {
        o.push_str("<table><tr><th>zone</th><th>u_time_corrector (min)</th><th>u_range_ratio</th><th>u_zone (m)</th><th>u_datum at the zone (m)</th></tr>");
    }
    for z in &r.inputs.zones {
        let from = match z.datum_from {
            "zone" => "the zone's own",
            "gauges" => "from its gauges",
            _ => "from its gauges, scaled form",
        };
        let _ = write!(
            o,
            "<tr><td>{}</td><td>{}{}</td><td>{}{}</td><td>{}{}</td><td>{} ({from})</td></tr>",
            esc(&z.zone),
            given(z.u_time_corrector_min),
            dflt(&format!("zone {}", z.zone), "u_time_corrector_min"),
            given(z.u_range_ratio),
            dflt(&format!("zone {}", z.zone), "u_range_ratio"),
            given(z.u_zone_m),
            dflt(&format!("zone {}", z.zone), "u_zone_m"),
            given(z.u_datum_m)
        );
    }
    if r.inputs.tide_field.is_none() {
        o.push_str("</table>");
    }
    let _ = write!(
        o,
        "<p>Sounding model (where no per-sounding column): u = sqrt({}² + ({}·d)²) m.</p>",
        given(r.inputs.sounding_a_m),
        given(r.inputs.sounding_b)
    );
    if !r.inputs.defaulted.is_empty() {
        o.push_str(r#"<p><span class="mark">†</span> the project's default (<code>[uncertainty] default_u_…</code>): the gauge or zone sets no value of its own.</p>"#);
    }
    push_provenance(&mut o, r);
    let _ = writeln!(
        o,
        "<p>Tide uncertainty by first-order GUM propagation (JCGM 100:2008) through {}; 95 % expansion with k = 1.96.</p></main>{SORT_SCRIPT}</body></html>",
        match r.tide_model {
            "corrector_field" => "the continuous tide (corrector fields blended between the gauges, docs/cotidal.md)",
            "astronomical_residual" => "the continuous tide (prediction from the interpolated constants plus the gauges' residuals, docs/cotidal.md)",
            "correction_file" => "the correction file's model, as carried in it",
            _ => "the zoning model",
        }
    );
    o
}
