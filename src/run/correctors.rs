//! `ebbwise correctors` and `ebbwise apply`: tide-correction files for processing pipelines, with
//! provenance, and reduction from such a file (which proves the format by use).

use std::path::{Path, PathBuf};

use rayon::prelude::*;
use serde::Serialize;

use super::load::{output_clashes, Loaded, PlannedOutput};
use super::provenance::{differences, tide_inputs, InputDifference};
use super::reduce::{reduce_project, run_outputs, ApplyModel, ReduceOptions, RunKind, RunSummary};
use crate::compute::correctors::{
    modal_step_s, zone_corrector_with, Corrector, CorrectorStatus, CorrectorUncertainty,
    LineSeries, LineSeriesModel, SoundingTableModel, BRIDGE_TOLERANCE_S,
};
use crate::compute::reduce::StepSource;
use crate::compute::zoning::FeedState;
use crate::io::atomic::write_atomic;
use crate::io::correctors_file::{
    push_line_row, push_zone_rows, read_correction_file, sha256_file, sounding_corrections,
    sounding_key_clashes, CorrectionFile, CORRECTORS_FORMAT, LINE_CORRECTOR_COLUMNS,
    ZONE_CORRECTOR_COLUMNS,
};
use crate::io::error::{IoError, Position};
use crate::io::soundings::{lines_of, ChunkReader, Fields, SoundingLayout};
use crate::io::timefmt::utc_time;

/// Name of the per-zone corrector file.
pub const ZONE_FILE: &str = "correctors-zones.csv";

/// Name of the per-line corrector file.
pub const LINE_FILE: &str = "correctors-lines.csv";

/// A line's regular-step grid time takes the zone of the sounding nearest in time, if one lies
/// within this many seconds (else the time is `missing`).
pub const LINE_NEAREST_SOUNDING_S: f64 = 300.0;

/// Zone `zi`'s corrector at UTC time `t_s`, as `ebbwise reduce` finds the zone's tide: with the
/// feeds renormalised when `[gap_fill] renormalise_feeds` is on, and a `gap_filled` value
/// worded as the reduced file's `status_detail` words it.
fn corrector_at(loaded: &Loaded, zi: usize, t_s: f64, states: &mut Vec<FeedState>) -> Corrector {
    let gf = &loaded.project.spec.gap_fill;
    let u = loaded.uncertainty.as_ref().map(|u| CorrectorUncertainty {
        gauge_u: &u.gauge_u,
        zone_u: &u.zone_u[zi],
        rates: &u.gauge_rates,
    });
    let zone = &loaded.zones[zi];
    let mut c = zone_corrector_with(
        zone,
        &loaded.gauges,
        loaded.interp.as_ref(),
        u,
        t_s,
        states,
        gf.enabled && gf.renormalise_feeds,
    );
    if c.status == CorrectorStatus::GapFilled {
        let mut d = String::new();
        super::reduce::gap_filled_detail(
            &loaded.gauges,
            states,
            &mut d,
            &mut super::reduce::FillLabels::default(),
        );
        c.detail = Some(std::sync::Arc::from(d));
    }
    c
}

/// The per-line corrector file's text: for each survey line, on the step grid over the line's
/// own time span (from the grid time at or before its first sounding to the one at or after its
/// last), the tide in the zone where the launch was (the zone of the sounding nearest in
/// time). Returns the text and the number of lines.
pub fn line_correctors(loaded: &Loaded, step_s: f64) -> Result<(String, usize), IoError> {
    use std::collections::BTreeMap;
    // Per line: per grid bin, the first sounding's (time, zone).
    let mut lines: BTreeMap<String, BTreeMap<i64, (f64, Option<usize>)>> = BTreeMap::new();
    // Per line: its first and last sounding time, so the grid brackets every sounding.
    let mut spans: BTreeMap<String, (f64, f64)> = BTreeMap::new();
    for (gi, group) in loaded.project.spec.soundings.iter().enumerate() {
        let locator = super::load::locator_for_crs(&loaded.zoning, &group.crs).map_err(|m| {
            IoError::content(
                Position::file(&loaded.project.path).field(format!("soundings[{gi}].crs")),
                m,
            )
        })?;
        for_each_sounding(loaded, group, |v| {
            let bin = (v.t_s / step_s).round() as i64;
            let span = spans.entry(v.line_id.to_string()).or_insert((v.t_s, v.t_s));
            *span = (span.0.min(v.t_s), span.1.max(v.t_s));
            lines
                .entry(v.line_id.to_string())
                .or_default()
                .entry(bin)
                .or_insert((v.t_s, locator.locate(v.x, v.y)));
        })?;
    }
    let mut text = LINE_CORRECTOR_COLUMNS.join(",");
    text.push('\n');
    let mut states = Vec::new();
    for (line, bins) in &lines {
        let (Some((&b0, _)), Some((&b1, _))) = (bins.first_key_value(), bins.last_key_value())
        else {
            continue;
        };
        // Grid times from the last one at or before the line's first sounding to the first one
        // at or after its last, so that no sounding lies outside the line's rows.
        let (t_first, t_last) = spans[line];
        let b0 = b0.min((t_first / step_s).floor() as i64);
        let b1 = b1.max((t_last / step_s).ceil() as i64);
        for b in b0..=b1 {
            let t = b as f64 * step_s;
            // The sounding nearest in time among this bin and its neighbours.
            let near = (b - 1..=b + 1)
                .filter_map(|k| bins.get(&k))
                .min_by(|x, y| (x.0 - t).abs().total_cmp(&(y.0 - t).abs()))
                .filter(|(ts, _)| (ts - t).abs() <= LINE_NEAREST_SOUNDING_S);
            let zone = near.and_then(|(_, z)| *z);
            let c = match zone {
                Some(z) => corrector_at(loaded, z, t, &mut states),
                None => Corrector {
                    t_s: t,
                    tide_m: None,
                    u_tide_m: None,
                    u_parts_m: None,
                    status: CorrectorStatus::Missing,
                    detail: None,
                },
            };
            push_line_row(
                &mut text,
                line,
                zone.map(|z| loaded.zones[z].id.as_str()),
                &c,
            );
        }
    }
    Ok((text, lines.len()))
}

/// Options of a corrector run.
#[derive(Debug, Clone)]
pub struct CorrectorsOptions {
    /// Output folder.
    pub out_dir: PathBuf,
    /// Time step, minutes.
    pub step_min: f64,
    /// Start of the span, UTC seconds (default: the soundings' first time, floored to the step).
    pub from_s: Option<f64>,
    /// End of the span, UTC seconds (default: the soundings' last time, ceiled to the step).
    pub to_s: Option<f64>,
    /// Also write per-sounding corrector files.
    pub per_sounding: bool,
    /// Also write a per-survey-line corrector file.
    pub per_line: bool,
}

/// One input file in the provenance.
pub use crate::compute::qa_report::InputFile as InputHash;

/// The JSON sidecar of a correction file.
#[derive(Debug, Clone, Serialize)]
pub struct Provenance {
    /// Layout identifier.
    pub format: &'static str,
    /// `per_zone` or `per_sounding`.
    pub kind: &'static str,
    /// The correction file this describes.
    pub file: String,
    /// ebbwise version.
    pub ebbwise_version: &'static str,
    /// Creation time, ISO 8601 UTC.
    pub created_utc: String,
    /// Project file.
    pub project_file: String,
    /// Every input with its SHA-256.
    pub inputs: Vec<InputHash>,
    /// Zoning mode and parameters.
    pub zoning: serde_json::Value,
    /// Each gauge's datum relation.
    pub gauges: Vec<serde_json::Value>,
    /// Time step, minutes (per-zone files).
    pub step_min: Option<f64>,
    /// Span of the file, ISO 8601 UTC (per-zone files).
    pub span_utc: Option<(String, String)>,
    /// Column meanings.
    pub columns: Vec<(String, String)>,
    /// Every input of the project in three parts (`tide`, `uncertainty`, `other`), as
    /// [`crate::run::provenance::tide_inputs`] records them: what `ebbwise apply` compares.
    pub project_inputs: serde_json::Value,
    /// The caution that goes with every result.
    pub caution: &'static str,
}

/// What a corrector run wrote.
#[derive(Debug, Clone)]
pub struct CorrectorsOutcome {
    /// Files written (CSV and sidecars).
    pub written: Vec<PathBuf>,
    /// Rows per status in the per-zone file.
    pub zone_rows_by_status: Vec<(&'static str, usize)>,
    /// The span, UTC seconds.
    pub span_s: (f64, f64),
    /// The per-sounding run, when asked.
    pub soundings: Option<RunSummary>,
    /// Things the user should know (e.g. a step longer than a gauge's maximum gap).
    pub warnings: Vec<String>,
}

/// First and last sounding time over the project's files (rows that cannot be read are
/// skipped here; the reduction reports them).
pub fn soundings_time_range(loaded: &Loaded) -> Result<Option<(f64, f64)>, IoError> {
    let mut range: Option<(f64, f64)> = None;
    for group in &loaded.project.spec.soundings {
        for_each_sounding(loaded, group, |v| {
            range = Some(match range {
                None => (v.t_s, v.t_s),
                Some((a, b)) => (a.min(v.t_s), b.max(v.t_s)),
            });
        })?;
    }
    Ok(range)
}

/// Calls `f` with every readable sounding of a group's files, in file order (rows that cannot be
/// read are skipped here; the reduction reports them).
fn for_each_sounding(
    loaded: &Loaded,
    group: &crate::io::project::SoundingsSpec,
    mut f: impl FnMut(&crate::io::soundings::SoundingValues),
) -> Result<(), IoError> {
    for path in &group.files {
        let file = std::fs::File::open(path).map_err(|e| IoError::file(path, e))?;
        let mut r = ChunkReader::new(file, 1);
        let mut layout: Option<SoundingLayout> = None;
        let mut fields = Fields::default();
        while let Some(c) = r
            .next_chunk(Vec::new())
            .map_err(|e| IoError::file(path, e))?
        {
            for (_, raw) in lines_of(&c) {
                let Ok(line) = std::str::from_utf8(raw) else {
                    continue;
                };
                if layout.is_none() {
                    layout = Some(SoundingLayout::resolve(
                        group,
                        Some(line),
                        loaded.project.naive_offset,
                        path,
                    )?);
                    if group.header {
                        continue;
                    }
                }
                let lay = layout.as_ref().expect("set above");
                fields.split(line, lay.delimiter);
                if let Ok(v) = lay.parse(line, &fields) {
                    f(&v);
                }
            }
        }
    }
    Ok(())
}

fn provenance(
    loaded: &Loaded,
    kind: &'static str,
    file: &Path,
    extra_inputs: &[&Path],
) -> Result<Provenance, IoError> {
    let p = &loaded.project;
    let soundings: Vec<(&Path, Option<&str>)> = extra_inputs.iter().map(|p| (*p, None)).collect();
    let inputs = crate::run::provenance::input_files(loaded, &soundings, None)?;
    let zones: Vec<serde_json::Value> = loaded
        .zones
        .iter()
        .map(|z| {
            serde_json::json!({
                "zone": z.id,
                "mean_level_form": z.mean_level.label(),
                "mean_level_above_datum_m": match z.mean_level {
                    crate::compute::zoning::MeanLevelForm::ZoneMean { zone_mean_level_above_datum_m } => Some(zone_mean_level_above_datum_m),
                    _ => None,
                },
                "feeds": z.feeds.iter().map(|f| serde_json::json!({
                    "gauge": loaded.gauges[f.gauge].id,
                    "weight": f.weight,
                    "time_corrector_min": f.time_corrector_min,
                    "range_ratio": f.range_ratio,
                })).collect::<Vec<_>>(),
            })
        })
        .collect();
    Ok(Provenance {
        format: CORRECTORS_FORMAT,
        kind,
        file: file
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default(),
        ebbwise_version: env!("CARGO_PKG_VERSION"),
        created_utc: utc_time(chrono::Utc::now().timestamp_millis() as f64 / 1000.0),
        project_file: p.path.display().to_string(),
        inputs,
        zoning: serde_json::json!({
            "mode": "discrete_zones",
            "time_interpolation": loaded.interp.name(),
            "zones": zones,
        }),
        gauges: p
            .spec
            .gauges
            .iter()
            .map(|g| {
                serde_json::json!({
                    "gauge": g.id,
                    "units": g.units,
                    "zero_above_datum_m": g.zero_above_datum_m,
                    "mean_level_above_datum_m": g.mean_level_above_datum_m,
                    "max_gap_min": g.max_gap_min,
                    "tide_m_from_reading": "reading converted to metres + zero_above_datum_m",
                })
            })
            .collect(),
        step_min: None,
        span_utc: None,
        columns: Vec::new(),
        project_inputs: super::provenance::tide_inputs(loaded)?,
        caution: crate::CAUTION,
    })
}

fn write_sidecar(csv_path: &Path, prov: &Provenance) -> Result<PathBuf, IoError> {
    let mut name = csv_path
        .file_name()
        .map(|n| n.to_os_string())
        .unwrap_or_default();
    name.push(".json");
    let path = csv_path.with_file_name(name);
    let bytes = serde_json::to_vec_pretty(prov)
        .map_err(|e| IoError::content(Position::file(&path), e.to_string()))?;
    write_atomic(&path, &bytes)
}

/// Every file `ebbwise correctors` writes into `out_dir`: the per-zone file and its sidecar,
/// and when asked the per-line file and the per-sounding files, each with its sidecar.
pub fn correctors_outputs(
    project: &crate::io::project::Project,
    out_dir: &Path,
    per_sounding: bool,
    per_line: bool,
) -> Vec<PlannedOutput> {
    let mut out = Vec::new();
    let mut file = |name: &str, what: &str| {
        out.push(PlannedOutput {
            path: out_dir.join(name),
            what: format!("the {what} correction file"),
        });
        out.push(PlannedOutput {
            path: out_dir.join(format!("{name}.json")),
            what: format!("the sidecar of the {what} correction file"),
        });
    };
    if project.spec.tide_field.is_none() {
        file(ZONE_FILE, "per-zone");
    }
    if per_line {
        file(LINE_FILE, "per-line");
    }
    if per_sounding {
        out.extend(run_outputs(
            project,
            out_dir,
            RunKind::SoundingCorrectors,
            None,
        ));
    }
    out
}

/// The first clash of `outputs` with the inputs or each other, as the error that stops a run.
fn refuse_clashes(
    loaded: &Loaded,
    outputs: &[PlannedOutput],
    extra_inputs: &[(PathBuf, String)],
) -> Result<(), IoError> {
    match output_clashes(&loaded.project, outputs, extra_inputs)
        .into_iter()
        .next()
    {
        Some(f) => Err(IoError::content(f.at, f.message)),
        None => Ok(()),
    }
}

/// Writes the per-zone corrector file (and per-sounding files when asked), each with its sidecar.
pub fn write_correctors(
    loaded: &Loaded,
    opts: &CorrectorsOptions,
) -> Result<CorrectorsOutcome, IoError> {
    if !(opts.step_min.is_finite() && opts.step_min > 0.0) {
        return Err(IoError::content(
            Position::file(&loaded.project.path).field("--step-min"),
            "the step must be a positive number of minutes",
        ));
    }
    if loaded.field.is_some() && (opts.per_line || !opts.per_sounding) {
        return Err(IoError::content(
            Position::file(&loaded.project.path).field("tide_field"),
            if opts.per_line {
                "the project reduces with a continuous tide ([tide_field]): a line's tide varies along the line, not by the zone the launch is in, so no per-line series is written; use --per-sounding alone"
            } else {
                "the project reduces with a continuous tide ([tide_field]): the tide varies within each zone, so no per-zone series can stand for it; write one corrector per sounding with --per-sounding"
            },
        ));
    }
    refuse_clashes(
        loaded,
        &correctors_outputs(
            &loaded.project,
            &opts.out_dir,
            opts.per_sounding,
            opts.per_line,
        ),
        &[],
    )?;
    let step_s = (opts.step_min * 60.0 * 1000.0).round() / 1000.0;
    let (from, to) = match (opts.from_s, opts.to_s) {
        (Some(a), Some(b)) => (a, b),
        (a, b) => {
            let r = soundings_time_range(loaded)?.ok_or_else(|| {
                IoError::content(
                    Position::file(&loaded.project.path),
                    "no readable sounding gives a survey period: give --from and --to",
                )
            })?;
            (
                a.unwrap_or((r.0 / step_s).floor() * step_s),
                b.unwrap_or((r.1 / step_s).ceil() * step_s),
            )
        }
    };
    if to < from {
        return Err(IoError::content(
            Position::file(&loaded.project.path).field("--to"),
            "the span ends before it starts",
        ));
    }
    let n = ((to - from) / step_s).floor() as usize + 1;
    std::fs::create_dir_all(&opts.out_dir).map_err(|e| IoError::file(&opts.out_dir, e))?;
    let mut written = Vec::new();
    let mut counts = [0usize; CorrectorStatus::ALL.len()];
    if loaded.field.is_none() {
        write_zone_file(loaded, opts, (from, step_s, n), &mut written, &mut counts)?;
    }
    if opts.per_line {
        let path = opts.out_dir.join(LINE_FILE);
        let (text, _) = line_correctors(loaded, step_s)?;
        written.push(write_atomic(&path, text.as_bytes())?);
        let files: Vec<&Path> = loaded
            .project
            .spec
            .soundings
            .iter()
            .flat_map(|g| g.files.iter().map(PathBuf::as_path))
            .collect();
        let mut prov = provenance(loaded, "per_line", &path, &files)?;
        prov.step_min = Some(opts.step_min);
        prov.columns = column_meanings(&LINE_CORRECTOR_COLUMNS);
        written.push(write_sidecar(&path, &prov)?);
    }
    let mut clash_warnings = Vec::new();
    let soundings = if opts.per_sounding {
        let run = reduce_project(
            loaded,
            &ReduceOptions {
                out_dir: opts.out_dir.clone(),
                progress: None,
                kind: RunKind::SoundingCorrectors,
                only_files: None,
            },
        )?;
        for f in &run.files {
            let mut prov = provenance(loaded, "per_sounding", &f.output, &[f.input.as_path()])?;
            prov.columns = column_meanings(&crate::run::reduce::SOUNDING_CORRECTOR_COLUMNS);
            written.push(f.output.clone());
            written.push(write_sidecar(&f.output, &prov)?);
            let clashes = sounding_key_clashes(&f.output)?;
            if let Some((line, t)) = &clashes.first {
                let (of, why, remedy) = if loaded.field.is_some() {
                    (
                        "another tide",
                        "as the beams of a ping do under a continuous tide ([tide_field])",
                        "reduce these soundings with `ebbwise reduce` itself",
                    )
                } else {
                    (
                        "another zone",
                        "as the beams of a ping across a zone edge do",
                        "use the per-zone correction file (correctors-zones.csv) for these soundings",
                    )
                };
                clash_warnings.push(format!(
                    "{}: {} row(s) share a line and time with a row of {of} ({} line-and-time key(s), first line '{line}' at {}), {why}: `ebbwise apply` will refuse this file; {remedy}",
                    f.output.display(),
                    clashes.soundings,
                    clashes.keys,
                    crate::io::timefmt::utc_label(*t)
                ));
            }
        }
        Some(run)
    } else {
        None
    };
    let mut warnings = clash_warnings;
    for g in &loaded.project.spec.gauges {
        if opts.step_min > g.max_gap_min {
            warnings.push(format!(
                "the step ({} min) is longer than gauge '{}''s max_gap_min ({} min): interpolating this file between its times can bridge gaps that a direct reduction refuses; use a step no longer than {} min",
                opts.step_min, g.id, g.max_gap_min, g.max_gap_min
            ));
        }
    }
    Ok(CorrectorsOutcome {
        warnings,
        written,
        zone_rows_by_status: CorrectorStatus::ALL
            .iter()
            .map(|s| (s.as_str(), counts[*s as usize]))
            .collect(),
        span_s: (from, from + (n - 1) as f64 * step_s),
        soundings,
    })
}

/// The per-zone corrector file and its sidecar: `n` times from `from` every `step_s`.
fn write_zone_file(
    loaded: &Loaded,
    opts: &CorrectorsOptions,
    (from, step_s, n): (f64, f64, usize),
    written: &mut Vec<PathBuf>,
    counts: &mut [usize; CorrectorStatus::ALL.len()],
) -> Result<(), IoError> {
    let per_zone: Vec<Vec<Corrector>> = (0..loaded.zones.len())
        .into_par_iter()
        .map(|zi| {
            let mut states = Vec::new();
            (0..n)
                .map(|k| corrector_at(loaded, zi, from + k as f64 * step_s, &mut states))
                .collect()
        })
        .collect();
    let mut text = String::with_capacity(n * loaded.zones.len() * 48 + 128);
    text.push_str(&ZONE_CORRECTOR_COLUMNS.join(","));
    text.push('\n');
    for (z, rows) in loaded.zones.iter().zip(&per_zone) {
        push_zone_rows(&mut text, &z.id, rows);
        for r in rows {
            counts[r.status as usize] += 1;
        }
    }
    let zone_path = opts.out_dir.join(ZONE_FILE);
    written.push(write_atomic(&zone_path, text.as_bytes())?);
    let mut prov = provenance(loaded, "per_zone", &zone_path, &[])?;
    prov.step_min = Some(opts.step_min);
    prov.span_utc = Some((utc_time(from), utc_time(from + (n - 1) as f64 * step_s)));
    prov.columns = column_meanings(&ZONE_CORRECTOR_COLUMNS);
    written.push(write_sidecar(&zone_path, &prov)?);
    Ok(())
}

fn column_meanings(cols: &[&str]) -> Vec<(String, String)> {
    cols.iter()
        .map(|c| {
            let m = match *c {
                "zone" => "zone id of the zoning",
                "time_utc" => "ISO 8601 time, UTC, to the millisecond (to the microsecond when a sounding's time is finer)",
                "tide_m" => "tide: water level above chart datum, metres, positive up, 4 decimals; empty when missing",
                "u_tide_m" => "standard uncertainty (1 sigma) of the tide, metres, 4 decimals; empty when not computed",
                "u_tide_gauge_m" | "u_tide_datum_m" | "u_tide_range_m" | "u_tide_timing_m" | "u_tide_zone_m" => "one component of u_tide_m (standard, metres, 4 decimals), as in the reduced file; empty when u_tide_m is",
                "status" => "observed | interpolated | gap_filled | missing | flagged (per zone and per line); the sounding's status (per sounding)",
                "status_detail" => "for a gap_filled row, how its tide was filled (the reduced file's status_detail); else empty",
                "line" => "survey line",
                "source_file" => "soundings file the row comes from",
                "source_line" => "1-based line of the sounding in its file",
                _ => "",
            };
            (c.to_string(), m.to_string())
        })
        .collect()
}

/// What comparing a correction file's sidecar with the project found ([`provenance_check`]).
#[derive(Debug, Default)]
pub struct ProvenanceCheck {
    /// Inputs that differ and can change a tide (or, when uncertainty is carried, its
    /// uncertainty): `apply` refuses unless they are accepted.
    pub refused: Vec<InputDifference>,
    /// Inputs that differ but change neither the tide nor the uncertainty carried: named only.
    pub named: Vec<InputDifference>,
    /// Other things to say (no sidecar, a sidecar of an earlier layout).
    pub notes: Vec<String>,
}

/// Compares the sidecar of a correction file (`<file>.json`) with the project's current inputs
/// ([`crate::run::provenance::tide_inputs`]), item by item. `tide` differences are refused;
/// `uncertainty` differences are refused when `uncertainty_carried`, else named; `other`
/// differences (name, output folder, soundings groups, gauge names and positions, paths) are
/// named. A sidecar without recorded inputs (an earlier layout) is compared by the SHA-256 of
/// the zoning and the gauge records only, and a note says so; a file without sidecar gives a
/// note that its provenance cannot be checked.
pub fn provenance_check(
    loaded: &Loaded,
    corrections: &Path,
    uncertainty_carried: bool,
) -> Result<ProvenanceCheck, IoError> {
    let mut out = ProvenanceCheck::default();
    let sidecar = sidecar_path(corrections);
    let Ok(bytes) = std::fs::read(&sidecar) else {
        out.notes.push(format!(
            "{} has no sidecar {}: its provenance and step cannot be checked against this project",
            corrections.display(),
            sidecar.display()
        ));
        return Ok(out);
    };
    let v: serde_json::Value = serde_json::from_slice(&bytes)
        .map_err(|e| IoError::content(Position::file(&sidecar), format!("not valid JSON: {e}")))?;
    let current = tide_inputs(loaded)?;
    if v["project_inputs"].is_object() {
        for d in differences(&v["project_inputs"], &current) {
            let refuse = d.part == "tide" || (d.part == "uncertainty" && uncertainty_carried);
            if refuse {
                out.refused.push(d);
            } else {
                out.named.push(d);
            }
        }
        if out.refused.is_empty() && out.named.is_empty() {
            let recorded = v["inputs"]
                .as_array()
                .into_iter()
                .flatten()
                .find(|i| i["role"] == "project")
                .and_then(|i| i["sha256"].as_str());
            if recorded
                .is_some_and(|h| sha256_file(&loaded.project.path).ok().as_deref() != Some(h))
            {
                out.notes.push(format!(
                    "the project file {} differs from the one the correction file was made with, but in nothing that changes a tide or its uncertainty (a comment or layout)",
                    loaded.project.path.display()
                ));
            }
        }
        return Ok(out);
    }
    out.notes.push(format!(
        "{} records no project inputs (an earlier layout): only the zoning and the gauge records are compared (re-run `ebbwise correctors` for a full check)",
        sidecar.display()
    ));
    let tide = &current["tide"];
    for input in v["inputs"].as_array().into_iter().flatten() {
        let (Some(role), Some(hash)) = (input["role"].as_str(), input["sha256"].as_str()) else {
            continue;
        };
        let now = if role == "zoning" {
            tide["zoning_sha256"].as_str().map(str::to_string)
        } else if let Some(id) = role
            .strip_prefix("gauge record '")
            .and_then(|r| r.strip_suffix('\''))
        {
            tide["gauges"][id]["record_sha256"]
                .as_str()
                .map(str::to_string)
        } else {
            continue;
        };
        if now.as_deref() != Some(hash) {
            out.refused.push(InputDifference {
                part: "tide",
                item: format!("{role} (SHA-256)"),
                recorded: hash.to_string(),
                current: now.unwrap_or_else(|| "absent".into()),
            });
        }
    }
    Ok(out)
}

/// The sidecar of a correction file, `<file>.json`.
fn sidecar_path(corrections: &Path) -> PathBuf {
    let mut name = corrections
        .file_name()
        .map(|n| n.to_os_string())
        .unwrap_or_default();
    name.push(".json");
    corrections.with_file_name(name)
}

/// The step a correction file's sidecar states (`step_min`), seconds, when it has one.
fn sidecar_step_s(corrections: &Path) -> Option<f64> {
    let bytes = std::fs::read(sidecar_path(corrections)).ok()?;
    let v: serde_json::Value = serde_json::from_slice(&bytes).ok()?;
    v["step_min"]
        .as_f64()
        .filter(|m| m.is_finite() && *m > 0.0)
        .map(|m| (m * 60.0 * 1000.0).round() / 1000.0)
}

/// Whether every row of a correction file that gives a tide also gives `u_tide_m` and its five
/// components: (rows with a tide, of which without them).
fn carried_uncertainty(file: &CorrectionFile) -> (usize, usize) {
    let mut with_tide = 0;
    let mut without_u = 0;
    let mut count = |tide: Option<f64>, u: Option<f64>, parts: Option<&[f64; 5]>| {
        if tide.is_some() {
            with_tide += 1;
            if u.is_none() || parts.is_none() {
                without_u += 1;
            }
        }
    };
    match file {
        CorrectionFile::Zones(map) => map
            .values()
            .flatten()
            .for_each(|c| count(c.tide_m, c.u_tide_m, c.u_parts_m.as_ref())),
        CorrectionFile::Lines(map) => map
            .values()
            .flatten()
            .for_each(|(c, _)| count(c.tide_m, c.u_tide_m, c.u_parts_m.as_ref())),
        CorrectionFile::Soundings(rows) => rows
            .values()
            .for_each(|r| count(r.tide_m, r.u_tide_m, r.u_parts_m.as_ref())),
        #[allow(unreachable_patterns)]
        _ => {}
    }
    (with_tide, without_u)
}

/// Reduces soundings with tide from a correction file (per zone: interpolated in time within
/// the sounding's zone; per line: along the sounding's line; per sounding: looked up by line and
/// time). Two consecutive rows of a series further apart than the file's step (the sidecar's
/// `step_min`, else the series' most common interval) are not bridged. With uncertainty in
/// `loaded`, the file's `u_tide_m` and components are carried into the uncertainty columns; a
/// file without them gives no uncertainty (a warning), or an error when `uncertainty_asked`.
/// The summary's warnings say what the user should know (no sidecar, provenance, step source).
pub fn apply_corrections(
    loaded: &mut Loaded,
    corrections: &Path,
    soundings: Vec<PathBuf>,
    out_dir: PathBuf,
    uncertainty_asked: bool,
    accept_changed_inputs: bool,
) -> Result<RunSummary, IoError> {
    let extra = [
        (corrections.to_path_buf(), "the correction file".to_string()),
        (
            sidecar_path(corrections),
            "the correction file's sidecar".to_string(),
        ),
    ];
    let only_files = (!soundings.is_empty()).then_some(soundings.as_slice());
    refuse_clashes(
        loaded,
        &run_outputs(
            &loaded.project,
            &out_dir,
            RunKind::Apply(ApplyModel::Zones(&[], &[], StepSource::Series), corrections),
            only_files,
        ),
        &extra,
    )?;
    let file = read_correction_file(corrections)?;
    let mut warnings = Vec::new();
    if loaded.uncertainty.is_some() {
        let (with_tide, without_u) = carried_uncertainty(&file);
        if without_u > 0 {
            let why = format!(
                "{} of the {} rows of {} that give a tide have no u_tide_m or not all five of its components (written without [uncertainty], or by an earlier layout)",
                without_u,
                with_tide,
                corrections.display()
            );
            if uncertainty_asked {
                return Err(IoError::content(
                    Position::file(corrections).field("u_tide_m"),
                    format!("{why}: uncertainty cannot be carried; re-run `ebbwise correctors` with the project's [uncertainty] table, or give --no-uncertainty"),
                ));
            }
            warnings.push(format!(
                "{why}: no uncertainty columns and no QA report are written (re-run `ebbwise correctors` with [uncertainty] to carry it)"
            ));
            loaded.uncertainty = None;
        }
    }
    if loaded.project.spec.gap_fill.enabled
        && !crate::io::correctors_file::has_detail_column(corrections)
    {
        warnings.push(format!(
            "{} is of an earlier layout (no status_detail column), which marks no tide gap_filled: soundings whose tide rests on filled gauge samples are reduced without that status (re-run `ebbwise correctors` to carry it)",
            corrections.display()
        ));
    }
    let check = provenance_check(loaded, corrections, loaded.uncertainty.is_some())?;
    if !check.refused.is_empty() && !accept_changed_inputs {
        let items: Vec<String> = check.refused.iter().map(|d| format!("  {d}")).collect();
        return Err(IoError::content(
            Position::file(&sidecar_path(corrections)),
            format!(
                "the project has changed since the correction file was made, in {} input(s) that change a tide or its uncertainty:\n{}\nre-run `ebbwise correctors {}` (with the options the file was made with) to make the file again, or give --accept-changed-inputs to apply it as it is (the differences are then written into apply-summary.json)",
                check.refused.len(),
                items.join("\n"),
                loaded.project.path.display()
            ),
        ));
    }
    warnings.extend(check.notes);
    for d in &check.refused {
        warnings.push(format!("accepted with --accept-changed-inputs: {d}"));
    }
    for d in &check.named {
        warnings.push(format!("differs, but changes no tide: {d}"));
    }
    let accepted = check.refused;
    let loaded: &Loaded = loaded;
    let stated_step_s = sidecar_step_s(corrections);
    let step_from = if stated_step_s.is_some() {
        StepSource::Sidecar
    } else {
        StepSource::Series
    };
    let step_of = |series: &[Corrector]| {
        stated_step_s
            .or_else(|| modal_step_s(series))
            .unwrap_or(f64::INFINITY)
    };
    let zone_ids: Vec<&str> = loaded.zones.iter().map(|z| z.id.as_str()).collect();
    let only = if soundings.is_empty() {
        None
    } else {
        Some(soundings)
    };
    let step_note = |kind: &str| {
        format!(
            "{} has no stated step (no sidecar step_min): rows of a {kind} further apart than the most common interval between its rows are not bridged",
            corrections.display()
        )
    };
    let mut summary = match file {
        CorrectionFile::Zones(map) => {
            for id in map.keys() {
                if !zone_ids.contains(&id.as_str()) {
                    return Err(IoError::content(
                        crate::io::correctors_file::zone_position(corrections, id),
                        format!(
                            "zone '{id}' is not in the project's zoning {}",
                            loaded.project.spec.zoning.display()
                        ),
                    ));
                }
            }
            let series: Vec<Vec<Corrector>> = zone_ids
                .iter()
                .map(|z| map.get(*z).cloned().unwrap_or_default())
                .collect();
            let steps: Vec<f64> = series.iter().map(|s| step_of(s)).collect();
            // A gauge gap shorter than the step leaves no `missing` row: say so.
            for (z, step_s) in loaded.zones.iter().zip(&steps) {
                let gap_s = z
                    .feeds
                    .iter()
                    .map(|f| loaded.gauges[f.gauge].series.max_gap_s)
                    .fold(f64::INFINITY, f64::min);
                if step_s.is_finite() && *step_s > gap_s + BRIDGE_TOLERANCE_S {
                    warnings.push(format!(
                        "zone '{}': the step of {} ({} min) is longer than the max_gap_min of a gauge feeding it ({} min): a gauge gap between two rows is not seen and is bridged; write the file with a step no longer than {} min",
                        z.id,
                        corrections.display(),
                        step_s / 60.0,
                        gap_s / 60.0,
                        gap_s / 60.0
                    ));
                }
            }
            if step_from == StepSource::Series {
                warnings.push(step_note("zone"));
            }
            reduce_project(
                loaded,
                &ReduceOptions {
                    out_dir,
                    progress: None,
                    kind: RunKind::Apply(
                        ApplyModel::Zones(&series, &steps, step_from),
                        corrections,
                    ),
                    only_files: only,
                },
            )?
        }
        CorrectionFile::Lines(map) => {
            let index: std::collections::HashMap<&str, usize> =
                zone_ids.iter().enumerate().map(|(i, z)| (*z, i)).collect();
            let mut model = LineSeriesModel {
                lines: Default::default(),
                step_from,
            };
            for (line, rows) in map {
                let mut series = Vec::with_capacity(rows.len());
                let mut zones = Vec::with_capacity(rows.len());
                for (c, z) in rows {
                    let zi = match z {
                        Some(id) => Some(*index.get(id.as_str()).ok_or_else(|| {
                            IoError::content(
                                crate::io::correctors_file::zone_position(corrections, &id),
                                format!(
                                    "zone '{id}' is not in the project's zoning {}",
                                    loaded.project.spec.zoning.display()
                                ),
                            )
                        })?),
                        None => None,
                    };
                    series.push(c);
                    zones.push(zi);
                }
                let step_s = step_of(&series);
                model.lines.insert(
                    line,
                    LineSeries {
                        series,
                        zones,
                        step_s,
                    },
                );
            }
            if step_from == StepSource::Series {
                warnings.push(step_note("survey line"));
            }
            reduce_project(
                loaded,
                &ReduceOptions {
                    out_dir,
                    progress: None,
                    kind: RunKind::Apply(ApplyModel::Lines(&model), corrections),
                    only_files: only,
                },
            )?
        }
        CorrectionFile::Soundings(rows) => {
            let model = SoundingTableModel {
                table: sounding_corrections(rows, &zone_ids),
            };
            reduce_project(
                loaded,
                &ReduceOptions {
                    out_dir,
                    progress: None,
                    kind: RunKind::Apply(ApplyModel::Soundings(&model), corrections),
                    only_files: only,
                },
            )?
        }
    };
    summary.warnings = warnings;
    summary.accepted_input_differences = accepted;
    Ok(summary)
}
