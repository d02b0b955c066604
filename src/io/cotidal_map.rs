//! The co-tidal map's files: `cotidal.geojson` (the lines as a GeoJSON FeatureCollection in
//! WGS 84 [longitude, latitude]) and `cotidal.svg` (a standalone map in local metres: zones,
//! triangulation, stations, lines with their labels, zone-boundary steps, scale bar, north
//! arrow, legend and caution). Both are written through [`AtomicFile`].

use std::fmt::Write;
use std::path::{Path, PathBuf};

use geo::Centroid;

use super::atomic::AtomicFile;
use super::error::IoError;
use super::report_html::{esc, step_legend, step_scale_top_m};
use crate::compute::cotidal_map::{CotidalMap, StepsOnMap};
use crate::compute::isolines::LineKind;

/// One feature of `cotidal.geojson`.
#[derive(Debug, Clone, PartialEq)]
pub struct LineFeature {
    /// Phase or amplitude.
    pub kind: LineKind,
    /// True phase (degrees) or amplitude (metres).
    pub value: f64,
    /// Whether these parts lie inside the stations' hull.
    pub inside_hull: bool,
    /// Polylines of [longitude, latitude].
    pub parts: Vec<Vec<[f64; 2]>>,
}

/// Writes the lines as a GeoJSON FeatureCollection: LineString (one part) or MultiLineString
/// features with properties `constituent`, `kind` (`phase` | `amplitude`), `phase_deg` or
/// `amplitude_m`, and `inside_hull`. Coordinates to 7 decimals (about 1 cm).
pub fn write_cotidal_geojson(
    path: &Path,
    constituent: &str,
    features: &[LineFeature],
    inputs: &[&Path],
) -> Result<PathBuf, IoError> {
    let r7 = |v: f64| (v * 1e7).round() / 1e7;
    let feats: Vec<serde_json::Value> = features
        .iter()
        .filter(|f| !f.parts.is_empty())
        .map(|f| {
            let coords: Vec<Vec<[f64; 2]>> = f
                .parts
                .iter()
                .map(|p| p.iter().map(|c| [r7(c[0]), r7(c[1])]).collect())
                .collect();
            let geometry = if coords.len() == 1 {
                serde_json::json!({ "type": "LineString", "coordinates": coords[0] })
            } else {
                serde_json::json!({ "type": "MultiLineString", "coordinates": coords })
            };
            let mut props = serde_json::Map::new();
            props.insert("constituent".into(), constituent.into());
            match f.kind {
                LineKind::Phase => {
                    props.insert("kind".into(), "phase".into());
                    props.insert("phase_deg".into(), ((f.value * 1e6).round() / 1e6).into());
                }
                LineKind::Amplitude => {
                    props.insert("kind".into(), "amplitude".into());
                    props.insert("amplitude_m".into(), ((f.value * 1e6).round() / 1e6).into());
                }
            }
            props.insert("inside_hull".into(), f.inside_hull.into());
            serde_json::json!({ "type": "Feature", "properties": props, "geometry": geometry })
        })
        .collect();
    let doc = serde_json::json!({ "type": "FeatureCollection", "features": feats });
    let mut f = AtomicFile::create(path, inputs)?;
    let text =
        serde_json::to_string(&doc).map_err(|e| IoError::file(path, std::io::Error::other(e)))?;
    f.write_all(text.as_bytes())?;
    f.write_all(b"\n")?;
    f.commit()
}

/// Writes `svg` to `path`.
pub fn write_svg(path: &Path, svg: &str, inputs: &[&Path]) -> Result<PathBuf, IoError> {
    let mut f = AtomicFile::create(path, inputs)?;
    f.write_all(svg.as_bytes())?;
    f.commit()
}

const PHASE_COLOUR: &str = "#c2185b";
const AMPLITUDE_COLOUR: &str = "#00796b";

/// The map as a standalone SVG. `title` heads it, `notes` are printed under the legend, and
/// `caution` at the foot.
pub fn render_cotidal_svg(
    map: &CotidalMap,
    title: &str,
    notes: &[String],
    caution: &str,
) -> String {
    let (w, h) = (1280.0, 960.0);
    let (mx0, my0, mw, mh) = (20.0, 60.0, 880.0, 820.0);
    // Extent: zones and stations.
    let (mut lo, mut hi) = (
        (f64::INFINITY, f64::INFINITY),
        (f64::NEG_INFINITY, f64::NEG_INFINITY),
    );
    let mut take = |x: f64, y: f64| {
        lo = (lo.0.min(x), lo.1.min(y));
        hi = (hi.0.max(x), hi.1.max(y));
    };
    for s in &map.stations {
        take(s.x_m, s.y_m);
    }
    for (_, mp) in &map.zones {
        for p in &mp.0 {
            for c in &p.exterior().0 {
                take(c.x, c.y);
            }
        }
    }
    let pad = 0.05 * (hi.0 - lo.0).max(hi.1 - lo.1).max(1.0);
    let (lo, hi) = ((lo.0 - pad, lo.1 - pad), (hi.0 + pad, hi.1 + pad));
    let s = (mw / (hi.0 - lo.0)).min(mh / (hi.1 - lo.1));
    let ox = mx0 + 0.5 * (mw - s * (hi.0 - lo.0));
    let oy = my0 + 0.5 * (mh - s * (hi.1 - lo.1));
    let px = |x: f64| ox + (x - lo.0) * s;
    let py = |y: f64| oy + (hi.1 - y) * s;
    let path = |pts: &[(f64, f64)]| {
        let mut d = String::new();
        for (j, (x, y)) in pts.iter().enumerate() {
            let _ = write!(
                d,
                "{}{:.1},{:.1} ",
                if j == 0 { "M" } else { "L" },
                px(*x),
                py(*y)
            );
        }
        d
    };
    let mut o = String::with_capacity(256 * 1024);
    let _ = write!(
        o,
        r##"<?xml version="1.0" encoding="UTF-8"?>
<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" font-family="DejaVu Sans, Liberation Sans, Arial, sans-serif">
<title>{}</title>
<style>
.lbl {{ font-size: 11px; paint-order: stroke; stroke: #fff; stroke-width: 3px; stroke-linejoin: round; }}
.zid {{ font-size: 15px; font-weight: bold; fill: #12324d; text-anchor: middle; paint-order: stroke; stroke: #fff; stroke-width: 4px; stroke-linejoin: round; }}
.sid {{ font-size: 12px; font-weight: bold; fill: #111; paint-order: stroke; stroke: #fff; stroke-width: 3px; stroke-linejoin: round; }}
.tick {{ font-size: 11px; fill: #2c3e50; }}
.leg {{ font-size: 12px; fill: #1d2a36; }}
.steplabel {{ font-size: 11px; font-weight: bold; fill: #111; paint-order: stroke; stroke: #fff; stroke-width: 3px; stroke-linejoin: round; }}
</style>
<rect x="0" y="0" width="{w}" height="{h}" fill="#ffffff"/>
<rect x="{mx0}" y="{my0}" width="{mw}" height="{mh}" fill="#eef4f8" stroke="#9aa9b6"/>
<text x="{mx0}" y="30" font-size="18" font-weight="bold" fill="#12324d">{}</text>
"##,
        esc(title),
        esc(title)
    );
    let _ = write!(
        o,
        r#"<clipPath id="mapclip"><rect x="{mx0}" y="{my0}" width="{mw}" height="{mh}"/></clipPath><g clip-path="url(#mapclip)">"#
    );
    // Zones.
    for (_, mp) in &map.zones {
        for p in &mp.0 {
            let pts: Vec<(f64, f64)> = p.exterior().0.iter().map(|c| (c.x, c.y)).collect();
            let _ = write!(
                o,
                r##"<path class="zone" d="{}Z" fill="#fdfcf4" stroke="#34495e" stroke-width="1.4"/>"##,
                path(&pts)
            );
        }
    }
    // Triangulation and hull.
    for t in &map.triangles {
        let _ = write!(
            o,
            r##"<path class="triangle" d="{}Z" fill="none" stroke="#7a8793" stroke-width="0.8" stroke-dasharray="2 3"/>"##,
            path(t)
        );
    }
    if map.hull.len() > 2 {
        let _ = write!(
            o,
            r##"<path class="hull" d="{}" fill="none" stroke="#4a5663" stroke-width="1.6"/>"##,
            path(&map.hull)
        );
    }
    // Lines: outside parts dashed; labels on inside parts long enough to hold them.
    let mut labels = Vec::new();
    let zone_ids: Vec<(f64, f64)> = map
        .zones
        .iter()
        .filter_map(|(_, mp)| mp.centroid())
        .map(|c| (px(c.x()), py(c.y())))
        .collect();
    for l in &map.lines {
        let (col, text) = match l.kind {
            LineKind::Phase => (PHASE_COLOUR, format!("{}°", fmt_num(l.value))),
            LineKind::Amplitude => (AMPLITUDE_COLOUR, format!("{} m", fmt_num(l.value))),
        };
        let class = match l.kind {
            LineKind::Phase => "phase",
            LineKind::Amplitude => "amplitude",
        };
        for p in &l.outside {
            let _ = write!(
                o,
                r#"<path class="{class} outside" d="{}" fill="none" stroke="{col}" stroke-width="1.1" stroke-dasharray="6 4" stroke-opacity="0.75"/>"#,
                path(p)
            );
        }
        for p in &l.inside {
            let _ = write!(
                o,
                r#"<path class="{class}" d="{}" fill="none" stroke="{col}" stroke-width="1.5"/>"#,
                path(p)
            );
        }
        // Labels on inside parts long enough to hold them (on outside parts only when no inside
        // part took one); a label is moved along its part (a half, a third, two thirds, a
        // quarter, three quarters) until it stands clear of the zone ids and the labels
        // already placed.
        let before = labels.len();
        for (n, p) in l.inside.iter().chain(&l.outside).enumerate() {
            if n >= l.inside.len() && labels.len() > before {
                break;
            }
            let len: f64 = p
                .windows(2)
                .map(|q| (q[0].0 - q[1].0).hypot(q[0].1 - q[1].1) * s)
                .sum();
            if len < 70.0 {
                continue;
            }
            for f in [0.5, 1.0 / 3.0, 2.0 / 3.0, 0.25, 0.75] {
                let k = ((p.len() - 1) as f64 * f).round() as usize;
                let (x, y) = (px(p[k].0), py(p[k].1));
                let inside_map =
                    x > mx0 + 20.0 && x < mx0 + mw - 20.0 && y > my0 + 10.0 && y < my0 + mh - 10.0;
                let clear = labels.iter().all(|l: &(f64, f64, &str, String, &str)| {
                    (l.0 - x).abs() > 44.0 || (l.1 - y).abs() > 14.0
                }) && zone_ids
                    .iter()
                    .all(|z| (z.0 - x).abs() > 40.0 || (z.1 - y).abs() > 16.0);
                if inside_map && clear {
                    labels.push((x, y, col, text.clone(), class));
                    break;
                }
            }
        }
    }
    // Zone-boundary steps: the shared edges, drawn in plot coordinates through their local
    // metres.
    if let StepsOnMap::Drawn(steps) = &map.steps {
        let drawn: Vec<crate::compute::boundary::BoundaryStep> = steps
            .iter()
            .map(|m| {
                let mut s = m.step.clone();
                s.edge_lonlat = m
                    .edge_m
                    .iter()
                    .map(|p| p.iter().map(|(x, y)| [*x, *y]).collect())
                    .collect();
                s
            })
            .collect();
        super::report_html::step_edges_svg(&mut o, &drawn, &|x, y| (px(x), py(y)), None);
    }
    for (x, y, col, text, class) in &labels {
        let _ = write!(
            o,
            r#"<text class="lbl {class}-label" x="{x:.1}" y="{y:.1}" dy="4" text-anchor="middle" fill="{col}">{}</text>"#,
            esc(text)
        );
    }
    // Zone ids.
    for (id, mp) in &map.zones {
        if let Some(c) = mp.centroid() {
            let _ = write!(
                o,
                r#"<text class="zid" x="{:.1}" y="{:.1}">{}</text>"#,
                px(c.x()),
                py(c.y()),
                esc(id)
            );
        }
    }
    // Stations: gauges filled triangles, virtual gauges hollow diamonds.
    for st in &map.stations {
        let (x, y) = (px(st.x_m), py(st.y_m));
        if st.is_virtual {
            let _ = write!(
                o,
                r##"<path class="virtual-gauge" d="M{x:.1} {:.1} l7 7 l-7 7 l-7 -7 z" fill="#fff" stroke="#e65100" stroke-width="2.2"/>"##,
                y - 7.0
            );
        } else {
            let _ = write!(
                o,
                r##"<path class="gauge" d="M{x:.1} {:.1} l7 12 h-14 z" fill="#0d47a1" stroke="#fff" stroke-width="1.2"/>"##,
                y - 8.0
            );
        }
        let _ = write!(
            o,
            r#"<text class="sid" x="{:.1}" y="{:.1}">{}</text>"#,
            x + 10.0,
            y - 6.0,
            esc(&st.id)
        );
    }
    o.push_str("</g>");
    // North arrow (local azimuthal equidistant projection centred on the stations: grid north
    // is true north at the centre, and within a small angle across a survey area).
    let (nx, ny) = (mx0 + 40.0, my0 + 30.0);
    let _ = write!(
        o,
        r##"<g class="north"><path d="M{nx} {ny} l10 34 l-10 -8 l-10 8 z" fill="#12324d"/><text x="{nx}" y="{}" font-size="14" font-weight="bold" text-anchor="middle" fill="#12324d">N</text></g>"##,
        ny + 52.0
    );
    // Scale bar: a round length near a fifth of the map's width.
    let want_m = 0.2 * mw / s;
    let mag = 10f64.powf(want_m.log10().floor());
    let bar_m = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|k| k * mag)
        .rfind(|v| *v <= want_m)
        .unwrap_or(mag);
    // In the legend panel, clear of the map.
    let (bx, by, bw) = (mx0 + mw + 32.0, my0 + mh - 30.0, bar_m * s);
    let bar_label = if bar_m >= 1000.0 {
        format!("{} km", fmt_num(bar_m / 1000.0))
    } else {
        format!("{} m", fmt_num(bar_m))
    };
    let _ = write!(
        o,
        r##"<g class="scale-bar"><rect x="{:.1}" y="{:.1}" width="{:.1}" height="30" fill="#ffffff" fill-opacity="0.85"/><rect x="{bx}" y="{by}" width="{:.1}" height="6" fill="#12324d"/><rect x="{:.1}" y="{by}" width="{:.1}" height="6" fill="#fff" stroke="#12324d"/><text x="{bx}" y="{}" class="tick">0</text><text x="{:.1}" y="{}" class="tick" text-anchor="middle">{}</text></g>"##,
        bx - 8.0,
        by - 18.0,
        bw + 40.0,
        bw / 2.0,
        bx + bw / 2.0,
        bw / 2.0,
        by - 4.0,
        bx + bw,
        by - 4.0,
        esc(&bar_label)
    );
    // Legend.
    let lx = mx0 + mw + 24.0;
    let mut ly = my0 + 10.0;
    let _ = write!(
        o,
        r#"<text x="{lx}" y="{}" class="leg" font-weight="bold">Legend</text>"#,
        ly - 2.0
    );
    ly += 18.0;
    leg(
        &mut o,
        lx,
        &mut ly,
        &format!(
            r#"<line x1="0" y1="0" x2="26" y2="0" stroke="{PHASE_COLOUR}" stroke-width="1.8"/>"#
        ),
        &format!(
            "co-tidal line, {} phase every {}°",
            map.constituent,
            fmt_num(map.phase_step_deg)
        ),
    );
    leg(
        &mut o,
        lx,
        &mut ly,
        &format!(
            r#"<line x1="0" y1="0" x2="26" y2="0" stroke="{AMPLITUDE_COLOUR}" stroke-width="1.8"/>"#
        ),
        &format!(
            "co-range line, {} amplitude every {} m",
            map.constituent,
            fmt_num(map.amplitude_step_m)
        ),
    );
    leg(
        &mut o,
        lx,
        &mut ly,
        &format!(
            r#"<line x1="0" y1="0" x2="26" y2="0" stroke="{PHASE_COLOUR}" stroke-width="1.2" stroke-dasharray="6 4"/>"#
        ),
        "dashed: beyond the stations' hull, where",
    );
    leg(
        &mut o,
        lx,
        &mut ly,
        "",
        "the hull edge's field is carried out unchanged",
    );
    leg(
        &mut o,
        lx,
        &mut ly,
        r##"<line x1="0" y1="0" x2="26" y2="0" stroke="#4a5663" stroke-width="1.6"/>"##,
        "stations' hull",
    );
    leg(
        &mut o,
        lx,
        &mut ly,
        r##"<line x1="0" y1="0" x2="26" y2="0" stroke="#7a8793" stroke-width="0.8" stroke-dasharray="2 3"/>"##,
        "triangulation (Delaunay)",
    );
    leg(
        &mut o,
        lx,
        &mut ly,
        r##"<rect x="0" y="-7" width="26" height="14" fill="#fdfcf4" stroke="#34495e"/>"##,
        "zone, with its id",
    );
    leg(
        &mut o,
        lx,
        &mut ly,
        r##"<path d="M13 -8 l7 12 h-14 z" fill="#0d47a1"/>"##,
        "gauge with a record and constants",
    );
    leg(
        &mut o,
        lx,
        &mut ly,
        r##"<path d="M13 -7 l7 7 l-7 7 l-7 -7 z" fill="#fff" stroke="#e65100" stroke-width="2"/>"##,
        "virtual gauge (constants at a point)",
    );
    ly += 14.0;
    match &map.steps {
        StepsOnMap::Drawn(steps) if !steps.is_empty() => {
            let top = step_scale_top_m(
                steps
                    .iter()
                    .map(|m| m.step.max_step_m.abs())
                    .fold(0.0, f64::max),
            );
            leg(
                &mut o,
                lx,
                &mut ly,
                r##"<line x1="0" y1="0" x2="26" y2="0" stroke="#111" stroke-width="8"/><line x1="0" y1="0" x2="26" y2="0" stroke="#3b6cc0" stroke-width="5"/>"##,
                "shared zone edge, coloured by its",
            );
            leg(
                &mut o,
                lx,
                &mut ly,
                "",
                "largest tide step (worst three labelled)",
            );
            ly += 16.0;
            step_legend(&mut o, lx, ly, 300.0, top);
            ly += 44.0;
        }
        StepsOnMap::Drawn(_) => leg(
            &mut o,
            lx,
            &mut ly,
            "",
            "no two zones share an edge with tides",
        ),
        StepsOnMap::NotDrawn { reason: why } => {
            leg(&mut o, lx, &mut ly, "", "zone-boundary steps not drawn:");
            for chunk in wrap(why, 48) {
                leg(&mut o, lx, &mut ly, "", &chunk);
            }
        }
    }
    ly += 10.0;
    for n in notes {
        for chunk in wrap(n, 52) {
            let _ = write!(
                o,
                r#"<text x="{lx}" y="{ly}" class="tick">{}</text>"#,
                esc(&chunk)
            );
            ly += 15.0;
        }
    }
    // Caution.
    for (i, chunk) in wrap(caution, 190).iter().enumerate() {
        let _ = write!(
            o,
            r##"<text class="caution" x="{mx0}" y="{}" font-size="12" fill="#7a4b00">{}</text>"##,
            my0 + mh + 22.0 + 15.0 * i as f64,
            esc(chunk)
        );
    }
    o.push_str("</svg>\n");
    o
}

/// One legend row: a symbol and its text at (`lx`, `ly`); moves `ly` down a row.
fn leg(o: &mut String, lx: f64, ly: &mut f64, sym: &str, text: &str) {
    let _ = write!(
        o,
        r#"<g transform="translate({lx} {})">{sym}</g><text x="{}" y="{}" class="leg">{}</text>"#,
        *ly,
        lx + 34.0,
        *ly + 4.0,
        esc(text)
    );
    *ly += 22.0;
}

/// A number with no more decimals than it needs (up to 4).
fn fmt_num(v: f64) -> String {
    let s = format!("{v:.4}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.into()
    }
}

/// Splits `text` into lines of at most about `n` characters, at spaces.
fn wrap(text: &str, n: usize) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    for word in text.split_whitespace() {
        if !cur.is_empty() && cur.chars().count() + 1 + word.chars().count() > n {
            out.push(std::mem::take(&mut cur));
        }
        if !cur.is_empty() {
            cur.push(' ');
        }
        cur.push_str(word);
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}
