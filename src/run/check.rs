//! `ebbwise check`: reads everything a reduction would and reports problems before any reduction,
//! each with file, line and field where there is one.
//!
//! Errors (the run would be wrong or impossible; those of `load` stop every command alike): unreadable or malformed files, unknown gauges in
//! zones, weights not summing to 1, unclosed rings, overlapping zones (with the overlap area),
//! unknown CRS codes, gauge records out of time order or not spanning the soundings' times, rows
//! that cannot be read. Warnings: soundings outside every zone and the uncovered area, gauge gaps
//! longer than the maximum gap inside the survey period, skipped gauge samples.
//!
//! One problem hides no other: every value of the project file and every feature of the zoning
//! is checked, the soundings are read even when the zoning or the gauges have errors, and a
//! warning names what could not be checked because of them. The outputs a reduction would write
//! are checked against the inputs and each other before anything is written.

use std::fs::File;

use geo::{BooleanOps, ConvexHull, Coord, MultiPoint, MultiPolygon, Point, Polygon};
use serde::Serialize;

use super::correctors::correctors_outputs;
use super::load::{load, locator_for_crs, output_clashes};
use super::reduce::{run_outputs, RunKind};
use crate::compute::correctors::KeyClashes;
use crate::io::crs::Transformer;
use crate::io::error::{Finding, Position, Severity};
use crate::io::project::Project;
use crate::io::soundings::{lines_of, ChunkReader, Fields, SoundingLayout};
use crate::io::timefmt::utc_label;
use crate::io::zoning_geojson::{read_zoning_all, ZoningSpec};

pub use super::load::{geodesic_area_m2, OVERLAP_ERROR_M2};

/// Most row problems listed per file (the rest are counted).
const ROW_PROBLEMS_LISTED: usize = 20;

/// The outcome of a check.
#[derive(Debug, Clone, Serialize)]
pub struct CheckReport {
    /// Everything found, errors first.
    pub findings: Vec<Finding>,
    /// Sounding rows read.
    pub sounding_rows: u64,
    /// First and last sounding time, ISO 8601 UTC.
    pub sounding_span: Option<(String, String)>,
}

impl CheckReport {
    /// Number of errors.
    pub fn errors(&self) -> usize {
        self.findings
            .iter()
            .filter(|f| f.severity == Severity::Error)
            .count()
    }
    /// Number of warnings.
    pub fn warnings(&self) -> usize {
        self.findings
            .iter()
            .filter(|f| f.severity == Severity::Warning)
            .count()
    }
}

/// Checks a project file and everything it names.
pub fn check_project(project_path: &std::path::Path) -> CheckReport {
    let mut report = CheckReport {
        findings: Vec::new(),
        sounding_rows: 0,
        sounding_span: None,
    };
    let project = match Project::load_all(project_path) {
        Ok(p) => p,
        Err(errors) => {
            report
                .findings
                .extend(errors.into_iter().map(Finding::from));
            report.findings.push(Finding::warning(
                Position::file(project_path),
                "not checked because of the errors above: the gauge records, the zoning and the soundings (the project file names them and says how to read them)",
            ));
            finish(&mut report);
            return report;
        }
    };
    let loaded = match load(project.clone(), None) {
        Ok(l) => Some(l),
        Err(f) => {
            report.findings.extend(f);
            None
        }
    };
    // Outputs that would overwrite an input or each other: errors for a reduction into the
    // project's output folder, warnings for the correction files (`ebbwise correctors` with
    // every option) since only that command writes them.
    let out_dir = &project.spec.output.dir;
    report.findings.extend(output_clashes(
        &project,
        &run_outputs(&project, out_dir, RunKind::Reduce, None),
        &[],
    ));
    for f in output_clashes(
        &project,
        &correctors_outputs(&project, out_dir, true, true),
        &[],
    ) {
        report.findings.push(Finding::warning(
            f.at,
            format!("`ebbwise correctors` would refuse to run: {}", f.message),
        ));
    }
    // CRS codes.
    let mut crs_ok = vec![true; project.spec.soundings.len()];
    for (i, g) in project.spec.soundings.iter().enumerate() {
        if let Err(m) = crate::io::crs::check_crs(&g.crs) {
            crs_ok[i] = false;
            report.findings.push(Finding::error(
                Position::file(&project.path).field(format!("soundings[{i}].crs")),
                m,
            ));
        }
    }
    // The zoning the soundings are located in: the loaded one, or, when the project did not
    // load for other reasons (a gauge record, a zone naming an unknown gauge), the zoning read
    // on its own if it has no error itself.
    let zoning: Option<ZoningSpec> = match &loaded {
        Some(l) => Some(l.zoning.clone()),
        None => read_zoning_all(&project.spec.zoning)
            .ok()
            .filter(|z| z.errors.is_empty()),
    };
    if let Some(l) = &loaded {
        report.findings.extend(l.warnings.iter().cloned());
    } else {
        // The soundings are still read below (layout, every row), with the zoning when it can be.
        let what = if zoning.is_some() {
            "whether the gauge records span the survey and have gaps inside it"
        } else {
            "whether the soundings lie inside the zoning, the soundings' extent no zone covers, and whether the gauge records span the survey and have gaps inside it"
        };
        report.findings.push(Finding::warning(
            Position::file(&project.path),
            format!("not checked because of the errors above: {what}"),
        ));
    }
    if let Some(loaded) = &loaded {
        // Gauge skips.
        for (g, r) in project.spec.gauges.iter().zip(&loaded.records) {
            if r.skipped_null + r.skipped_flagged > 0 {
                report.findings.push(Finding::warning(
                    Position::file(&g.record),
                    format!(
                        "{} sample(s) with no height and {} flagged sample(s) skipped",
                        r.skipped_null, r.skipped_flagged
                    ),
                ));
            }
        }
    }
    // Overlapping zones are found by `load`, for every command alike.
    let zoning_union: Option<MultiPolygon<f64>> = zoning.as_ref().map(|z| {
        z.zones
            .iter()
            .fold(MultiPolygon(vec![]), |acc, z| acc.union(&z.polygon_lonlat))
    });
    let mut t_range: Option<(f64, f64)> = None;
    for (gi, group) in project.spec.soundings.iter().enumerate() {
        if !crs_ok[gi] {
            continue;
        }
        let locator = match zoning.as_ref().map(|z| locator_for_crs(z, &group.crs)) {
            None => None,
            Some(Ok(l)) => Some(l),
            Some(Err(m)) => {
                report.findings.push(Finding::error(
                    Position::file(&project.path).field(format!("soundings[{gi}].crs")),
                    m,
                ));
                continue;
            }
        };
        for path in &group.files {
            if crate::io::parquet_file::is_parquet(path) {
                check_parquet(
                    &mut report,
                    group,
                    project.naive_offset,
                    path,
                    locator.as_ref(),
                    &mut t_range,
                );
                continue;
            }
            let file = match File::open(path) {
                Ok(f) => f,
                Err(e) => {
                    report
                        .findings
                        .push(Finding::error(Position::file(path), e.to_string()));
                    continue;
                }
            };
            let mut reader = ChunkReader::new(file, 1);
            let mut layout: Option<SoundingLayout> = None;
            let mut fields = Fields::default();
            let mut problems = 0usize;
            let mut outside = 0u64;
            let mut first_outside = None;
            let mut hull_pts: Vec<Point<f64>> = Vec::new();
            let mut clashes = KeyClashes::default();
            loop {
                let chunk = match reader.next_chunk(Vec::new()) {
                    Ok(Some(c)) => c,
                    Ok(None) => break,
                    Err(e) => {
                        report
                            .findings
                            .push(Finding::error(Position::file(path), e.to_string()));
                        break;
                    }
                };
                for (n, raw) in lines_of(&chunk) {
                    if layout.is_none() {
                        let text = String::from_utf8_lossy(raw);
                        match SoundingLayout::resolve(
                            group,
                            Some(&text),
                            project.naive_offset,
                            path,
                        ) {
                            Ok(l) => layout = Some(l),
                            Err(e) => {
                                report.findings.push(e.into());
                                break;
                            }
                        }
                        if group.header {
                            continue;
                        }
                    }
                    let lay = layout.as_ref().expect("layout set above");
                    if raw.iter().all(u8::is_ascii_whitespace) {
                        continue;
                    }
                    report.sounding_rows += 1;
                    let Ok(line) = std::str::from_utf8(raw) else {
                        problems += 1;
                        if problems <= ROW_PROBLEMS_LISTED {
                            report.findings.push(Finding::error(
                                Position::file(path).line(n),
                                "the line is not valid UTF-8 text",
                            ));
                        }
                        continue;
                    };
                    fields.split(line, lay.delimiter);
                    match lay.parse(line, &fields) {
                        Err(p) => list_row_problem(&mut report.findings, &mut problems, path, n, p),
                        Ok(v) => {
                            widen(&mut t_range, v.t_s);
                            let Some(locator) = &locator else {
                                continue;
                            };
                            let zone = locator.locate(v.x, v.y);
                            if zone.is_none() {
                                outside += 1;
                                first_outside.get_or_insert(n);
                            }
                            clashes.add(v.line_id, v.t_s, zone);
                            hull_pts.push(Point::new(v.x, v.y));
                            if hull_pts.len() >= 200_000 {
                                let h = MultiPoint(std::mem::take(&mut hull_pts)).convex_hull();
                                hull_pts.extend(h.exterior().points());
                            }
                        }
                    }
                }
                if layout.is_none() {
                    break;
                }
            }
            more_problems(&mut report.findings, problems, path);
            if outside > 0 {
                report.findings.push(Finding::warning(
                    Position::file(path).line(first_outside.unwrap_or(0)),
                    format!("{outside} sounding(s) lie outside every zone (first on this line)"),
                ));
            }
            if let Some((line, t)) = &clashes.first {
                report.findings.push(Finding::warning(
                    Position::file(path),
                    format!(
                        "{} sounding(s) share a line and time with a sounding in another zone ({} line-and-time key(s), first line '{line}' at {}), as the beams of a ping across a zone edge do: a per-sounding correction file (`ebbwise correctors --per-sounding`) cannot hold them and `ebbwise apply` would refuse it; use the per-zone correction file",
                        clashes.soundings,
                        clashes.keys,
                        utc_label(*t)
                    ),
                ));
            }
            if let (true, Some(zoning_union)) = (hull_pts.len() >= 3, &zoning_union) {
                let hull = MultiPoint(hull_pts).convex_hull();
                if let Some(area) = uncovered_area_m2(&hull, &group.crs, zoning_union) {
                    if area > 1.0 {
                        report.findings.push(Finding::warning(
                            Position::file(path),
                            format!(
                                "{area:.0} m² of the soundings' extent (convex hull) is covered by no zone"
                            ),
                        ));
                    }
                }
            }
        }
    }
    if let Some((t0, t1)) = t_range {
        report.sounding_span = Some((utc_label(t0), utc_label(t1)));
        if let Some(loaded) = &loaded {
            check_gauge_spans(loaded, t0, t1, &mut report.findings);
        }
    }
    finish(&mut report);
    report
}

/// Counts an unreadable row and lists it when it is one of the first
/// [`ROW_PROBLEMS_LISTED`] of its file (`row`: its line, or a Parquet file's 1-based row).
fn list_row_problem(
    findings: &mut Vec<Finding>,
    problems: &mut usize,
    path: &std::path::Path,
    row: u64,
    p: crate::io::soundings::RowProblem,
) {
    *problems += 1;
    if *problems <= ROW_PROBLEMS_LISTED {
        findings.push(Finding::error(
            Position::file(path).line(row).field(p.field),
            p.message,
        ));
    }
}

/// Says how many unreadable rows of a file were not listed.
fn more_problems(findings: &mut Vec<Finding>, problems: usize, path: &std::path::Path) {
    if problems > ROW_PROBLEMS_LISTED {
        findings.push(Finding::error(
            Position::file(path),
            format!("{} more unreadable rows", problems - ROW_PROBLEMS_LISTED),
        ));
    }
}

/// Widens the soundings' time span to take `t_s`.
fn widen(range: &mut Option<(f64, f64)>, t_s: f64) {
    *range = Some(match *range {
        None => (t_s, t_s),
        Some((a, b)) => (a.min(t_s), b.max(t_s)),
    });
}

/// Checks a Parquet soundings file as a CSV one is: its mapping and column types, every row
/// (the first unreadable ones listed), its time span and the rows outside every zone.
fn check_parquet(
    report: &mut CheckReport,
    group: &crate::io::project::SoundingsSpec,
    naive_offset: Option<chrono::FixedOffset>,
    path: &std::path::Path,
    locator: Option<&crate::compute::locate::ZoneLocator>,
    t_range: &mut Option<(f64, f64)>,
) {
    use crate::io::parquet_file::{ParquetSoundings, READ_BATCH_ROWS};
    let opened = ParquetSoundings::open(path, READ_BATCH_ROWS).and_then(|src| {
        let (layout, geometry) =
            crate::run::reduce::parquet_layout(group, &src, naive_offset, path)?;
        Ok((src, layout, geometry))
    });
    let (mut src, layout, geometry) = match opened {
        Ok(x) => x,
        Err(e) => {
            report.findings.push(e.into());
            return;
        }
    };
    let m = layout.mapped_columns();
    let naive_s = naive_offset.map(|o| -f64::from(o.local_minus_utc()));
    let (mut problems, mut outside, mut first_outside, mut row) = (0usize, 0u64, None, 0u64);
    loop {
        let batch = match src.next_batch() {
            Ok(Some(b)) => b,
            Ok(None) => break,
            Err(e) => {
                report.findings.push(e.into());
                break;
            }
        };
        let view = match crate::io::columnar::BatchView::new(
            &batch,
            &m,
            &layout.column_names,
            geometry,
            naive_s,
            layout.time_is_unix_s(),
        ) {
            Ok(v) => v,
            Err(p) => {
                report.findings.push(Finding::error(
                    Position::file(path).field(p.column),
                    p.message,
                ));
                break;
            }
        };
        for r in 0..batch.num_rows() {
            row += 1;
            report.sounding_rows += 1;
            match view
                .row(r, &m, &layout)
                .and_then(|raw| layout.check(raw, |i| view.written(i, r)))
            {
                Err(p) => list_row_problem(&mut report.findings, &mut problems, path, row, p),
                Ok(v) => {
                    widen(t_range, v.t_s);
                    if locator.is_some_and(|l| l.locate(v.x, v.y).is_none()) {
                        outside += 1;
                        first_outside.get_or_insert(row);
                    }
                }
            }
        }
    }
    more_problems(&mut report.findings, problems, path);
    if outside > 0 {
        report.findings.push(Finding::warning(
            Position::file(path).line(first_outside.unwrap_or(0)),
            format!("{outside} sounding(s) lie outside every zone (first on this row)"),
        ));
    }
}

fn uncovered_area_m2(
    hull: &Polygon<f64>,
    crs: &str,
    zoning_union: &MultiPolygon<f64>,
) -> Option<f64> {
    let t = Transformer::new(crs, "EPSG:4326").ok()?;
    let pts = hull
        .exterior()
        .0
        .iter()
        .map(|c| t.convert(c.x, c.y).map(|(x, y)| Coord { x, y }))
        .collect::<Result<Vec<_>, _>>()
        .ok()?;
    let hull_ll = MultiPolygon(vec![Polygon::new(pts.into(), vec![])]);
    Some(geodesic_area_m2(&hull_ll.difference(zoning_union)))
}

fn check_gauge_spans(loaded: &super::load::Loaded, t0: f64, t1: f64, out: &mut Vec<Finding>) {
    for (gi, g) in loaded.gauges.iter().enumerate() {
        let spec = &loaded.project.spec.gauges[gi];
        // The times each gauge must cover: the survey span shifted by each feeding zone's Δt.
        let mut need: Option<(f64, f64)> = None;
        for z in &loaded.zones {
            for f in z.feeds.iter().filter(|f| f.gauge == gi) {
                let dt = f.time_corrector_min * 60.0;
                need = Some(match need {
                    None => (t0 - dt, t1 - dt),
                    Some((a, b)) => (a.min(t0 - dt), b.max(t1 - dt)),
                });
            }
        }
        let Some((a, b)) = need else {
            out.push(Finding::warning(
                Position::file(&loaded.project.path).field(format!("gauge[{gi}]")),
                format!("no zone uses gauge '{}'", g.id),
            ));
            continue;
        };
        let s = &g.series;
        let at = Position::file(&spec.record);
        match (s.times_s.first(), s.times_s.last()) {
            (Some(&first), Some(&last)) => {
                if first > a {
                    out.push(Finding::error(
                        at.clone(),
                        format!(
                            "the record starts at {}, but the soundings need gauge '{}' from {}",
                            utc_label(first),
                            g.id,
                            utc_label(a)
                        ),
                    ));
                }
                if last < b {
                    out.push(Finding::error(
                        at.clone(),
                        format!(
                            "the record ends at {}, but the soundings need gauge '{}' until {}",
                            utc_label(last),
                            g.id,
                            utc_label(b)
                        ),
                    ));
                }
            }
            _ => continue,
        }
        let rec = &loaded.records[gi];
        // The file line of each series sample: the series is a subsequence of the record in
        // file order (QC leaves samples out, never reorders them).
        let mut lines = Vec::with_capacity(s.times_s.len());
        let mut j = 0;
        for &t in &s.times_s {
            while j < rec.times_s.len() && rec.times_s[j] != t {
                j += 1;
            }
            lines.push(rec.lines.get(j).copied().unwrap_or(0));
            j += 1;
        }
        // The set-aside samples (time, line), sorted by time, to name the first one of a span.
        let mut set_aside: Vec<(f64, u64)> = loaded.qc[gi]
            .as_ref()
            .map(|q| {
                q.flags
                    .iter()
                    .enumerate()
                    .filter(|(_, f)| f.blocks_interpolation())
                    .map(|(i, _)| (rec.times_s[i], rec.lines[i]))
                    .collect()
            })
            .unwrap_or_default();
        set_aside.sort_by(|a, b| a.0.total_cmp(&b.0));
        let mut gaps = 0;
        for (w, &line) in s.times_s.windows(2).zip(lines.iter().skip(1)) {
            let (p, q) = (w[0], w[1]);
            let k = set_aside.partition_point(|x| x.0 <= p);
            let first_set_aside = set_aside.get(k).filter(|x| x.0 < q).map(|x| x.1);
            let flagged = first_set_aside.is_some();
            let line = first_set_aside.unwrap_or(line);
            if (flagged || q - p > s.max_gap_s) && q > a && p < b {
                gaps += 1;
                if gaps <= 5 {
                    let what = if flagged {
                        format!(
                            "quality control set aside this sample and those after it up to {} ({:.0} min from {} inside the survey period; see `ebbwise qc`): soundings then get status gauge_flagged",
                            utc_label(q), (q - p) / 60.0, utc_label(p)
                        )
                    } else {
                        format!(
                            "gap of {:.0} min from {} to {} inside the survey period (longer than max_gap_min = {}): soundings then have no tide",
                            (q - p) / 60.0, utc_label(p), utc_label(q), spec.max_gap_min
                        )
                    };
                    out.push(Finding::warning(at.clone().line(line), what));
                }
            }
        }
    }
}

fn finish(report: &mut CheckReport) {
    report.findings.sort_by_key(|f| f.severity);
}
