//! Tide-correction files: per-zone series on a regular time step, per-sounding rows, and the
//! JSON provenance sidecar written beside each.
//!
//! Per-zone file (`correctors-zones.csv`), one row per zone and time:
//! `zone,time_utc,tide_m,u_tide_m,status`.
//! Per-sounding file (`<stem>.correctors.csv`), one row per sounding:
//! `line,time_utc,source_file,source_line,zone,tide_m,u_tide_m,status`.
//! Per-line file (`correctors-lines.csv`): `line,time_utc,zone,tide_m,u_tide_m,status`.
//! Every file of layout 3 appends the five components of `u_tide_m` after `status`
//! ([`U_PART_COLUMNS`]), and layout 4 then `status_detail` (how a `gap_filled` tide was
//! filled); the reader also accepts layouts 3 and 2, without them.
//! Times are ISO 8601 UTC to the millisecond (to the microsecond when a sounding's time is finer);
//! `tide_m` is the water level above chart datum in metres, positive up, with 4 decimals, and
//! `u_tide_m` its standard uncertainty (1σ, 4 decimals, empty when not computed), as in the
//! reduced files; `status` is `observed`, `interpolated`, `gap_filled`, `missing` or `flagged`
//! (per zone and per line) or the sounding's status (per sounding). A missing value leaves the tide empty: nothing
//! is invented.

use std::collections::HashMap;
use std::io::Read;
use std::path::Path;

use sha2::{Digest, Sha256};

use super::error::{IoError, Position};
use super::numfmt::{push_fixed_str, HEIGHT_DECIMALS, UNCERTAINTY_DECIMALS};
use super::timefmt::{parse_time, push_utc, TimeFormat};
use crate::compute::correctors::{
    sounding_key, Corrector, CorrectorStatus, KeyClashes, SoundingCorrection,
};
use crate::compute::reduce::{SoundingStatus, TideU};

/// The last column of every correction file of layout 4: for a `gap_filled` row, how its tide was
/// filled, in the words of the reduced file's `status_detail`; empty on every other row.
pub const DETAIL_COLUMN: &str = "status_detail";

/// The five components of `u_tide_m`, appended after `status` in every correction file (layout
/// 3), in the order of the reduced file's uncertainty columns.
pub const U_PART_COLUMNS: [&str; 5] = [
    "u_tide_gauge_m",
    "u_tide_datum_m",
    "u_tide_range_m",
    "u_tide_timing_m",
    "u_tide_zone_m",
];

/// Columns of the per-zone file.
pub const ZONE_CORRECTOR_COLUMNS: [&str; 11] = [
    "zone",
    "time_utc",
    "tide_m",
    "u_tide_m",
    "status",
    U_PART_COLUMNS[0],
    U_PART_COLUMNS[1],
    U_PART_COLUMNS[2],
    U_PART_COLUMNS[3],
    U_PART_COLUMNS[4],
    DETAIL_COLUMN,
];

/// Columns of a per-sounding corrector file, in order.
pub const SOUNDING_CORRECTOR_COLUMNS: [&str; 14] = [
    "line",
    "time_utc",
    "source_file",
    "source_line",
    "zone",
    "tide_m",
    "u_tide_m",
    "status",
    U_PART_COLUMNS[0],
    U_PART_COLUMNS[1],
    U_PART_COLUMNS[2],
    U_PART_COLUMNS[3],
    U_PART_COLUMNS[4],
    DETAIL_COLUMN,
];

/// Columns of a per-line corrector file, in order.
pub const LINE_CORRECTOR_COLUMNS: [&str; 12] = [
    "line",
    "time_utc",
    "zone",
    "tide_m",
    "u_tide_m",
    "status",
    U_PART_COLUMNS[0],
    U_PART_COLUMNS[1],
    U_PART_COLUMNS[2],
    U_PART_COLUMNS[3],
    U_PART_COLUMNS[4],
    DETAIL_COLUMN,
];

/// Identifier of the correction-file layout (in the sidecar). Layout 3 had the same columns
/// without `status_detail` and no `gap_filled` rows in per-zone and per-line files, layout 2 also
/// no five components; the reader accepts both (detail and components empty).
pub const CORRECTORS_FORMAT: &str = "ebbwise-tide-correctors/4";

/// SHA-256 of a file, lowercase hex.
pub fn sha256_file(path: &Path) -> Result<String, IoError> {
    let mut f = std::fs::File::open(path).map_err(|e| IoError::file(path, e))?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = f.read(&mut buf).map_err(|e| IoError::file(path, e))?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(h.finalize().iter().map(|b| format!("{b:02x}")).collect())
}

/// Writes the per-zone rows for one zone into `out`: `zone,time_utc,tide_m,u_tide_m,status`,
/// the five components and `status_detail`.
pub fn push_zone_rows(out: &mut String, zone: &str, rows: &[Corrector]) {
    for c in rows {
        super::soundings::push_csv_field_string(out, zone);
        out.push(',');
        push_utc(out, c.t_s);
        push_corrector_tail(out, c);
    }
}

/// Writes one per-line row: `line,time_utc,zone,tide_m,u_tide_m,status`, the five components and
/// `status_detail`.
pub fn push_line_row(out: &mut String, line: &str, zone: Option<&str>, c: &Corrector) {
    super::soundings::push_csv_field_string(out, line);
    out.push(',');
    push_utc(out, c.t_s);
    out.push(',');
    if let Some(z) = zone {
        super::soundings::push_csv_field_string(out, z);
    }
    push_corrector_tail(out, c);
}

/// `,tide_m,u_tide_m,status,<five components>,status_detail` and the line end.
fn push_corrector_tail(out: &mut String, c: &Corrector) {
    out.push(',');
    if let Some(t) = c.tide_m {
        push_fixed_str(out, t, HEIGHT_DECIMALS);
    }
    out.push(',');
    if let Some(u) = c.u_tide_m {
        push_fixed_str(out, u, UNCERTAINTY_DECIMALS);
    }
    out.push(',');
    out.push_str(c.status.as_str());
    push_u_parts(out, c.u_parts_m.as_ref());
    out.push(',');
    if let Some(d) = &c.detail {
        super::soundings::push_csv_field_string(out, d);
    }
    out.push('\n');
}

/// `,gauge,datum,range,timing,zone` components (4 decimals), or five empty fields.
pub fn push_u_parts(out: &mut String, parts: Option<&[f64; 5]>) {
    match parts {
        Some(p) => {
            for x in p {
                out.push(',');
                push_fixed_str(out, *x, UNCERTAINTY_DECIMALS);
            }
        }
        None => out.push_str(",,,,,"),
    }
}

/// A per-sounding row as read: zone id, tide (m), status word, `u_tide_m` and its components.
#[derive(Debug, Clone, PartialEq)]
pub struct SoundingRow {
    /// Zone id.
    pub zone: Option<String>,
    /// Tide above chart datum, metres.
    pub tide_m: Option<f64>,
    /// The sounding's status word.
    pub status: String,
    /// Standard uncertainty of the tide, metres.
    pub u_tide_m: Option<f64>,
    /// Its five components, metres.
    pub u_parts_m: Option<[f64; 5]>,
    /// How a `gap_filled` tide was filled (`status_detail`; `None` when empty).
    pub detail: Option<String>,
}

/// Per-sounding rows keyed by (line, time in µs).
pub type SoundingRows = HashMap<(String, i64), SoundingRow>;

/// A correction file as read.
#[derive(Debug)]
#[non_exhaustive]
pub enum CorrectionFile {
    /// Per-zone series, by zone id, sorted by time.
    Zones(HashMap<String, Vec<Corrector>>),
    /// Per-sounding corrections by (line, time in µs); zone by id.
    Soundings(SoundingRows),
    /// Per-line series, by line id, sorted by time, each with its zone id.
    Lines(HashMap<String, Vec<(Corrector, Option<String>)>>),
}

/// Whether the header is `cols` (layout 4), `cols` without the trailing `status_detail`
/// (layout 3), or without it and the five components before it (layout 2).
fn header_is(h: &csv::StringRecord, cols: &[&str]) -> bool {
    let v3 = cols.len() - 1;
    let v2 = v3 - U_PART_COLUMNS.len();
    (h.len() == cols.len() || h.len() == v3 || h.len() == v2)
        && h.iter().zip(cols).all(|(a, b)| a == *b)
}

/// The per-zone or per-line status at field `i`, and the `status_detail` at field `detail`
/// (absent before layout 4): a detail only on a `gap_filled` row.
fn corrector_status(
    rec: &csv::StringRecord,
    i: usize,
    detail: usize,
    at: &dyn Fn(&str) -> Position,
) -> Result<(CorrectorStatus, Option<std::sync::Arc<str>>), IoError> {
    let status = CorrectorStatus::parse(&rec[i]).ok_or_else(|| {
        IoError::content(
            at("status"),
            format!(
                "expected observed, interpolated, gap_filled, missing or flagged, found '{}'",
                &rec[i]
            ),
        )
    })?;
    let d = rec.get(detail).filter(|d| !d.is_empty());
    if d.is_some() && status != CorrectorStatus::GapFilled {
        return Err(IoError::content(
            at(DETAIL_COLUMN),
            format!(
                "a status_detail is given only on a gap_filled row, found one on a '{}' row",
                status.as_str()
            ),
        ));
    }
    Ok((status, d.map(std::sync::Arc::from)))
}

/// The five components from fields `first..first + 5` (absent in layout 2): all given, or
/// `None` when all are empty; some but not all given is an error.
fn u_parts(
    rec: &csv::StringRecord,
    first: usize,
    at: &dyn Fn(&str) -> Position,
) -> Result<Option<[f64; 5]>, IoError> {
    let mut out = [0.0; 5];
    let mut given = 0;
    for (k, name) in U_PART_COLUMNS.iter().enumerate() {
        if let Some(v) = optional_uncertainty(rec, first + k, &at(name))? {
            out[k] = v;
            given += 1;
        }
    }
    match given {
        0 => Ok(None),
        5 => Ok(Some(out)),
        _ => Err(IoError::content(
            at(U_PART_COLUMNS[0]),
            "the five uncertainty components must be given together (or all left empty)",
        )),
    }
}

/// Whether the correction file's header ends with [`DETAIL_COLUMN`] (layout 4): a file of an
/// earlier layout cannot mark a tide `gap_filled`. `false` when the header cannot be read (the
/// reader then says why).
pub fn has_detail_column(path: &Path) -> bool {
    let Ok(f) = std::fs::File::open(path) else {
        return false;
    };
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_reader(std::io::BufReader::new(f));
    rdr.headers()
        .is_ok_and(|h| h.iter().next_back() == Some(DETAIL_COLUMN))
}

/// Reads a correction file of either kind (told apart by its header line).
pub fn read_correction_file(path: &Path) -> Result<CorrectionFile, IoError> {
    let f = std::fs::File::open(path).map_err(|e| IoError::file(path, e))?;
    parse_correction_file(std::io::BufReader::new(f), path)
}

/// Counts the rows of a per-sounding correction file that share a line and time with a row of
/// another zone or another tide ([`KeyClashes::add_row`]): the rows [`parse_correction_file`]
/// refuses.
pub fn sounding_key_clashes(path: &Path) -> Result<KeyClashes, IoError> {
    let f = std::fs::File::open(path).map_err(|e| IoError::file(path, e))?;
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_reader(std::io::BufReader::new(f));
    let mut zones: HashMap<String, usize> = HashMap::new();
    let mut clashes = KeyClashes::default();
    let mut rec = csv::StringRecord::new();
    while rdr.read_record(&mut rec).map_err(|e| read_error(e, path))? {
        if rec.len() < 5 || rec[1].is_empty() {
            continue;
        }
        let line = rec.position().map(|p| p.line()).unwrap_or(0);
        let t = parse_time(&rec[1], TimeFormat::Iso8601, None)
            .map_err(|m| IoError::content(Position::file(path).line(line).field("time_utc"), m))?;
        let zone = (!rec[4].is_empty()).then(|| {
            let n = zones.len();
            *zones.entry(rec[4].to_string()).or_insert(n)
        });
        clashes.add_row(&rec[0], t, zone, rec.get(5).unwrap_or(""));
    }
    Ok(clashes)
}

/// Parses a correction file from a reader, as if read from `path`.
pub fn parse_correction_file<R: Read>(reader: R, path: &Path) -> Result<CorrectionFile, IoError> {
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_reader(reader);
    let h = rdr.headers().map_err(|e| read_error(e, path))?.clone();
    let per_sounding = SOUNDING_CORRECTOR_COLUMNS;
    let zones = header_is(&h, &ZONE_CORRECTOR_COLUMNS);
    let lines = header_is(&h, &LINE_CORRECTOR_COLUMNS);
    if lines {
        return parse_line_rows(rdr, path);
    }
    if !zones && !header_is(&h, &per_sounding) {
        return Err(IoError::content(
            Position::file(path).line(1),
            format!(
                "not a tide-correction file: expected the header '{}', '{}' or '{}'",
                ZONE_CORRECTOR_COLUMNS.join(","),
                LINE_CORRECTOR_COLUMNS.join(","),
                per_sounding.join(",")
            ),
        ));
    }
    let mut by_zone: HashMap<String, Vec<Corrector>> = HashMap::new();
    let mut by_sounding = HashMap::new();
    let mut rec = csv::StringRecord::new();
    loop {
        match rdr.read_record(&mut rec) {
            Ok(false) => break,
            Ok(true) => {}
            Err(e) => return Err(read_error(e, path)),
        }
        let line = rec.position().map(|p| p.line()).unwrap_or(0);
        let at = |f: &str| Position::file(path).line(line).field(f.to_string());
        let opt_num = |i: usize, name: &str| optional_metres(&rec, i, &at(name));
        if zones {
            let t = parse_time(&rec[1], TimeFormat::Iso8601, None)
                .map_err(|m| IoError::content(at("time_utc"), m))?;
            let (status, detail) = corrector_status(&rec, 4, 10, &at)?;
            let tide = opt_num(2, "tide_m")?;
            if tide.is_none()
                != matches!(status, CorrectorStatus::Missing | CorrectorStatus::Flagged)
            {
                return Err(IoError::content(
                    at("tide_m"),
                    "a tide must be given exactly when the status is neither 'missing' nor 'flagged'",
                ));
            }
            let (u_tide_m, u_parts_m) = carried_uncertainty(&rec, 3, 5, &at)?;
            let series = by_zone.entry(rec[0].to_string()).or_default();
            if series.last().is_some_and(|c: &Corrector| c.t_s >= t) {
                return Err(IoError::content(
                    at("time_utc"),
                    "times of a zone must increase",
                ));
            }
            series.push(Corrector {
                t_s: t,
                tide_m: tide,
                u_tide_m,
                u_parts_m,
                status,
                detail,
            });
        } else {
            if rec[1].is_empty() {
                // A row that could not be read has no time to key it by (status bad_input).
                continue;
            }
            let t = parse_time(&rec[1], TimeFormat::Iso8601, None)
                .map_err(|m| IoError::content(at("time_utc"), m))?;
            let zone = (!rec[4].is_empty()).then(|| rec[4].to_string());
            let tide = opt_num(5, "tide_m")?;
            let (u_tide_m, u_parts_m) = carried_uncertainty(&rec, 6, 8, &at)?;
            let Some(word) = SoundingStatus::ALL
                .iter()
                .map(|s| s.as_str())
                .find(|w| *w == &rec[7])
            else {
                let words: Vec<&str> = SoundingStatus::ALL.iter().map(|s| s.as_str()).collect();
                return Err(IoError::content(
                    at("status"),
                    format!("expected {}, found '{}'", words.join(", "), &rec[7]),
                ));
            };
            let detail = rec.get(13).filter(|d| !d.is_empty()).map(str::to_string);
            if detail.is_some() && word != SoundingStatus::GapFilled.as_str() {
                return Err(IoError::content(
                    at(DETAIL_COLUMN),
                    format!(
                        "a status_detail is given only on a gap_filled row, found one on a '{word}' row"
                    ),
                ));
            }
            let row = SoundingRow {
                zone,
                tide_m: tide,
                status: word.to_string(),
                u_tide_m,
                u_parts_m,
                detail,
            };
            if let Some(prev) = by_sounding.insert(sounding_key(&rec[0], t), row.clone()) {
                if prev != row {
                    // Soundings sharing line and time (e.g. the beams of one multibeam ping) with
                    // different tides cannot be told apart by the key.
                    return Err(IoError::content(
                        at("time_utc"),
                        format!(
                            "another row has the same line '{}' and time but a different zone or tide: per-sounding correction files need a unique line and time per sounding (use the per-zone file instead)",
                            &rec[0]
                        ),
                    ));
                }
            }
        }
    }
    Ok(if zones {
        CorrectionFile::Zones(by_zone)
    } else {
        CorrectionFile::Soundings(by_sounding)
    })
}

fn parse_line_rows<R: Read>(
    mut rdr: csv::Reader<R>,
    path: &Path,
) -> Result<CorrectionFile, IoError> {
    let mut out: HashMap<String, Vec<(Corrector, Option<String>)>> = HashMap::new();
    let mut rec = csv::StringRecord::new();
    loop {
        match rdr.read_record(&mut rec) {
            Ok(false) => break,
            Ok(true) => {}
            Err(e) => return Err(read_error(e, path)),
        }
        let line = rec.position().map(|p| p.line()).unwrap_or(0);
        let at = |f: &str| Position::file(path).line(line).field(f.to_string());
        let num = |i: usize, name: &str| optional_metres(&rec, i, &at(name));
        let t = parse_time(&rec[1], TimeFormat::Iso8601, None)
            .map_err(|m| IoError::content(at("time_utc"), m))?;
        let (status, detail) = corrector_status(&rec, 5, 11, &at)?;
        let tide = num(3, "tide_m")?;
        if tide.is_none() != matches!(status, CorrectorStatus::Missing | CorrectorStatus::Flagged) {
            return Err(IoError::content(
                at("tide_m"),
                "a tide must be given exactly when the status is neither 'missing' nor 'flagged'",
            ));
        }
        let series = out.entry(rec[0].to_string()).or_default();
        if series.last().is_some_and(|(c, _)| c.t_s >= t) {
            return Err(IoError::content(
                at("time_utc"),
                "times of a line must increase",
            ));
        }
        let zone = (!rec[2].is_empty()).then(|| rec[2].to_string());
        let (u_tide_m, u_parts_m) = carried_uncertainty(&rec, 4, 6, &at)?;
        series.push((
            Corrector {
                t_s: t,
                tide_m: tide,
                u_tide_m,
                u_parts_m,
                status,
                detail,
            },
            zone,
        ));
    }
    Ok(CorrectionFile::Lines(out))
}

/// Field `i` as metres: empty is `None`; anything but a finite number is an error at `at`.
fn optional_metres(
    rec: &csv::StringRecord,
    i: usize,
    at: &Position,
) -> Result<Option<f64>, IoError> {
    let s = rec.get(i).unwrap_or("");
    if s.is_empty() {
        return Ok(None);
    }
    s.parse::<f64>()
        .ok()
        .filter(|v| v.is_finite())
        .map(Some)
        .ok_or_else(|| {
            IoError::content(
                at.clone(),
                format!("expected a number in metres, found '{s}'"),
            )
        })
}

/// Field `i` as a standard uncertainty in metres: as [`optional_metres`], and refused when
/// negative.
fn optional_uncertainty(
    rec: &csv::StringRecord,
    i: usize,
    at: &Position,
) -> Result<Option<f64>, IoError> {
    let v = optional_metres(rec, i, at)?;
    match v {
        Some(x) if x < 0.0 => Err(IoError::content(
            at.clone(),
            format!(
                "a standard uncertainty cannot be negative, found '{}'",
                rec.get(i).unwrap_or("")
            ),
        )),
        _ => Ok(v),
    }
}

/// How far `u_tide_m` may differ from the root sum of squares of its five components, metres,
/// when all six were written with 4 decimals. Each written value is within half a unit of the
/// last decimal, h = 0.00005 m, of the value computed. `u_tide_m` moves by at most h; the root sum
/// of squares is the Euclidean norm of the five components, so moving each by at most h moves it
/// by at most the norm of the moves, √5 · h (triangle inequality). The bound is their sum,
/// (1 + √5) · h ≈ 0.000162 m, with 1e-9 m for the decimal-to-binary conversion of six numbers.
pub const U_SUM_TOLERANCE_M: f64 = (1.0 + 2.236_067_977_499_79) * 0.000_05 + 1e-9;

/// `u_tide_m` (field `u_col`) and its five components (fields `first_part..`), each refused when
/// negative, and the row refused when both are given and `u_tide_m` is not the root sum of
/// squares of the components within [`U_SUM_TOLERANCE_M`].
fn carried_uncertainty(
    rec: &csv::StringRecord,
    u_col: usize,
    first_part: usize,
    at: &dyn Fn(&str) -> Position,
) -> Result<(Option<f64>, Option<[f64; 5]>), IoError> {
    let u = optional_uncertainty(rec, u_col, &at("u_tide_m"))?;
    let parts = u_parts(rec, first_part, at)?;
    if let (Some(u), Some(p)) = (u, parts) {
        let rss = p.iter().map(|x| x * x).sum::<f64>().sqrt();
        if (u - rss).abs() > U_SUM_TOLERANCE_M {
            return Err(IoError::content(
                at("u_tide_m"),
                format!(
                    "{u:.4} m is not the root sum of squares of the five components ({rss:.4} m): the components and u_tide_m must come from the same budget"
                ),
            ));
        }
    }
    Ok((u, parts))
}

/// A csv error as a positioned error: a row with a different number of fields from the header
/// is worded as the other readers word it; everything else as [`super::gauge_csv::csv_error`].
fn read_error(e: csv::Error, path: &Path) -> IoError {
    if let csv::ErrorKind::UnequalLengths {
        pos,
        expected_len,
        len,
    } = e.kind()
    {
        let mut at = Position::file(path);
        at.line = pos.as_ref().map(|p| p.line());
        return IoError::content(
            at,
            format!("the row has {len} fields, the header {expected_len}"),
        );
    }
    super::gauge_csv::csv_error(e, path)
}

/// Where zone `zone` first appears in the correction file `path`: the file, the line of its first
/// row and the field `zone`. The line is left out when the file cannot be read again or holds no
/// row of that zone. For messages about a zone found in a file already read.
pub fn zone_position(path: &Path, zone: &str) -> Position {
    let at = Position::file(path);
    let line = std::fs::File::open(path)
        .ok()
        .and_then(|f| first_line_of_zone(std::io::BufReader::new(f), zone));
    match line {
        Some(l) => at.line(l).field("zone"),
        None => at.field("zone"),
    }
}

/// The line of the first row whose `zone` field is `zone`, in a correction file of any kind.
fn first_line_of_zone<R: Read>(reader: R, zone: &str) -> Option<u64> {
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_reader(reader);
    let col = rdr.headers().ok()?.iter().position(|h| h == "zone")?;
    let mut rec = csv::StringRecord::new();
    while rdr.read_record(&mut rec).ok()? {
        if rec.get(col) == Some(zone) {
            return rec.position().map(|p| p.line());
        }
    }
    None
}

/// Turns per-sounding rows into model entries, zone ids resolved against `zone_ids`.
pub fn sounding_corrections(
    rows: SoundingRows,
    zone_ids: &[&str],
) -> HashMap<(String, i64), SoundingCorrection> {
    let index: HashMap<&str, usize> = zone_ids.iter().enumerate().map(|(i, z)| (*z, i)).collect();
    rows.into_iter()
        .map(|(k, row)| {
            let SoundingRow {
                zone,
                tide_m: tide,
                status,
                u_tide_m,
                u_parts_m,
                detail,
            } = row;
            let z = zone.as_deref().and_then(|z| index.get(z).copied());
            let carried_u = match (u_tide_m, u_parts_m) {
                (Some(u_tide_m), Some(parts_m)) => Some(TideU { u_tide_m, parts_m }),
                _ => None,
            };
            let v =
                match (z, tide) {
                    (Some(zone), Some(tide_m)) => SoundingCorrection::Tide {
                        zone,
                        tide_m,
                        carried_u,
                        filled: (status == SoundingStatus::GapFilled.as_str()).then(|| {
                            std::sync::Arc::from(detail.as_deref().unwrap_or(
                                "the correction file marks this sounding's tide gap_filled",
                            ))
                        }),
                    },
                    _ if status == "outside_zoning" => SoundingCorrection::Outside,
                    _ => SoundingCorrection::None {
                        zone: z,
                        flagged: status == "gauge_flagged",
                    },
                };
            (k, v)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<CorrectionFile, IoError> {
        parse_correction_file(text.as_bytes(), Path::new("c.csv"))
    }

    #[test]
    fn layout_2_reads_with_components_empty_and_layout_3_with_them() {
        let v2 =
            "zone,time_utc,tide_m,u_tide_m,status\nZ,2026-06-14T00:00:00Z,1.2000,0.0800,observed\n";
        let CorrectionFile::Zones(m) = parse(v2).unwrap() else {
            panic!("per zone")
        };
        assert_eq!(m["Z"][0].u_tide_m, Some(0.08));
        assert_eq!(m["Z"][0].u_parts_m, None);
        let v3 = format!(
            "{}\nZ,2026-06-14T00:00:00Z,1.2000,0.0742,observed,0.0100,0.0200,0.0300,0.0400,0.0500\n",
            ZONE_CORRECTOR_COLUMNS[..10].join(",")
        );
        let CorrectionFile::Zones(m) = parse(&v3).unwrap() else {
            panic!("per zone")
        };
        assert_eq!(m["Z"][0].u_parts_m, Some([0.01, 0.02, 0.03, 0.04, 0.05]));
        // Some components but not all: refused at the line and the first component's column.
        let bad = format!(
            "{}\nZ,2026-06-14T00:00:00Z,1.2000,0.0800,observed,0.0100,,0.0300,0.0400,0.0500\n",
            ZONE_CORRECTOR_COLUMNS[..10].join(",")
        );
        let e = parse(&bad).unwrap_err().to_string();
        assert!(e.contains("c.csv:2") && e.contains("u_tide_gauge_m"), "{e}");
        // Per sounding, layout 2 and 3.
        let s2 = "line,time_utc,source_file,source_line,zone,tide_m,u_tide_m,status\nL,2026-06-14T00:00:00Z,s.csv,2,Z,1.2000,0.0800,reduced\n";
        let CorrectionFile::Soundings(r) = parse(s2).unwrap() else {
            panic!("per sounding")
        };
        let row = r.values().next().unwrap();
        assert_eq!((row.u_tide_m, row.u_parts_m), (Some(0.08), None));
        let s3 = format!(
            "{}\nL,2026-06-14T00:00:00Z,s.csv,2,Z,1.2000,0.0742,reduced,0.0100,0.0200,0.0300,0.0400,0.0500\n",
            SOUNDING_CORRECTOR_COLUMNS[..13].join(",")
        );
        let CorrectionFile::Soundings(r) = parse(&s3).unwrap() else {
            panic!("per sounding")
        };
        assert_eq!(
            r.values().next().unwrap().u_parts_m,
            Some([0.01, 0.02, 0.03, 0.04, 0.05])
        );
    }

    fn zone_row(u: &str, parts: &str) -> String {
        format!(
            "{}\nZ,2026-06-14T00:00:00Z,1.2000,{u},observed,{parts}\n",
            ZONE_CORRECTOR_COLUMNS[..10].join(",")
        )
    }

    #[test]
    fn negative_uncertainties_are_refused_at_their_line_and_field() {
        // A standard uncertainty is a non-negative number (GUM, JCGM 100:2008, 2.3.1).
        let e = parse(&zone_row("-0.0800", ",,,,")).unwrap_err().to_string();
        assert!(
            e.contains("c.csv:2: field 'u_tide_m'") && e.contains("negative"),
            "{e}"
        );
        let e = parse(&zone_row("0.0800", "0.0100,0.0200,-0.0300,0.0400,0.0500"))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("c.csv:2: field 'u_tide_range_m'") && e.contains("negative"),
            "{e}"
        );
        // The same refusal in the per-line and per-sounding files.
        let l = format!(
            "{}\nL,2026-06-14T00:00:00Z,Z,1.2000,0.0800,observed,0.0100,0.0200,0.0300,-0.0400,0.0500\n",
            LINE_CORRECTOR_COLUMNS[..11].join(",")
        );
        let e = parse(&l).unwrap_err().to_string();
        assert!(e.contains("c.csv:2: field 'u_tide_timing_m'"), "{e}");
        let s = format!(
            "{}\nL,2026-06-14T00:00:00Z,s.csv,2,Z,1.2000,-0.0800,reduced,,,,,\n",
            SOUNDING_CORRECTOR_COLUMNS[..13].join(",")
        );
        let e = parse(&s).unwrap_err().to_string();
        assert!(e.contains("c.csv:2: field 'u_tide_m'"), "{e}");
    }

    #[test]
    fn u_tide_m_must_be_the_root_sum_of_squares_of_its_components() {
        // 0.01² + 0.02² + 0.03² + 0.04² + 0.05² = 0.0055 m², √ = 0.074162 m: written 0.0742.
        let parts = "0.0100,0.0200,0.0300,0.0400,0.0500";
        assert!(parse(&zone_row("0.0742", parts)).is_ok());
        // One unit of the last decimal off (0.0741, 0.058 mm below) is still within the rounding
        // bound of 0.162 mm; three units (0.0745, 0.34 mm above) are not.
        assert!(parse(&zone_row("0.0741", parts)).is_ok());
        let e = parse(&zone_row("0.0745", parts)).unwrap_err().to_string();
        assert!(e.contains("c.csv:2: field 'u_tide_m'"), "{e}");
        // A value clearly from another budget: refused in the per-line file too.
        let l = format!(
            "{}\nL,2026-06-14T00:00:00Z,Z,1.2000,0.0800,observed,{parts}\n",
            LINE_CORRECTOR_COLUMNS[..11].join(",")
        );
        let e = parse(&l).unwrap_err().to_string();
        assert!(
            e.contains("c.csv:2: field 'u_tide_m'") && e.contains("0.0742"),
            "{e}"
        );
        // The bound (derived at U_SUM_TOLERANCE_M): the worst case of six roundings of 0.00005 m.
        assert!((U_SUM_TOLERANCE_M - 0.000_161_8).abs() < 1e-7);
    }

    #[test]
    fn a_row_with_another_number_of_fields_names_its_line_and_both_counts() {
        let text = format!(
            "{}\nZ,2026-06-14T00:00:00Z,1.2000,0.0800,observed,,,,,\nZ,2026-06-14T00:10:00Z,1.2000,0.0800,observed,,,,,,\n",
            ZONE_CORRECTOR_COLUMNS[..10].join(",")
        );
        let e = parse(&text).unwrap_err().to_string();
        assert_eq!(e, "c.csv:3: the row has 11 fields, the header 10");
    }

    #[test]
    fn the_first_line_of_each_zone_is_found_in_every_kind_of_file() {
        let zones = format!(
            "{}\nA,2026-06-14T00:00:00Z,1.2000,,observed,,,,,\nB,2026-06-14T00:00:00Z,1.1000,,observed,,,,,\nB,2026-06-14T00:10:00Z,1.1000,,observed,,,,,\n",
            ZONE_CORRECTOR_COLUMNS[..10].join(",")
        );
        assert_eq!(first_line_of_zone(zones.as_bytes(), "B"), Some(3));
        assert_eq!(first_line_of_zone(zones.as_bytes(), "A"), Some(2));
        assert_eq!(first_line_of_zone(zones.as_bytes(), "C"), None);
        let lines = format!(
            "{}\nL,2026-06-14T00:00:00Z,A,1.2000,,observed,,,,,\nL,2026-06-14T00:10:00Z,B,1.2000,,observed,,,,,\n",
            LINE_CORRECTOR_COLUMNS[..11].join(",")
        );
        assert_eq!(first_line_of_zone(lines.as_bytes(), "B"), Some(3));
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("z.csv");
        std::fs::write(&p, &zones).unwrap();
        assert_eq!(
            zone_position(&p, "B").to_string(),
            format!("{}:3: field 'zone'", p.display())
        );
        assert_eq!(
            zone_position(&p, "C").to_string(),
            format!("{}: field 'zone'", p.display())
        );
    }

    /// Layout 4: a `gap_filled` row reads back with its detail, in each kind of file; layout 3
    /// (no `status_detail` column) still reads; a detail on another row, and a per-sounding status
    /// that is no sounding status, are refused at their line and field.
    #[test]
    fn gap_filled_rows_read_back_with_their_detail_and_bad_words_are_refused() {
        let detail = "gauge 'g' level filled by neighbour from gauge 'k' across 2026-06-14T13:10:00Z to 2026-06-14T14:00:00Z";
        let z = format!(
            "{}\nZ,2026-06-14T13:20:00Z,1.2000,,gap_filled,,,,,,{detail}\nZ,2026-06-14T13:21:00Z,1.2100,,interpolated,,,,,,\n",
            ZONE_CORRECTOR_COLUMNS.join(",")
        );
        let CorrectionFile::Zones(m) = parse(&z).unwrap() else {
            panic!("per zone")
        };
        assert_eq!(m["Z"][0].status, CorrectorStatus::GapFilled);
        assert_eq!(m["Z"][0].detail.as_deref(), Some(detail));
        assert_eq!(m["Z"][1].detail, None);
        // Layout 3: the header without status_detail.
        let v3 = format!(
            "{}\nZ,2026-06-14T13:20:00Z,1.2000,,gap_filled,,,,,\n",
            ZONE_CORRECTOR_COLUMNS[..10].join(",")
        );
        let CorrectionFile::Zones(m) = parse(&v3).unwrap() else {
            panic!("per zone")
        };
        assert_eq!(
            (m["Z"][0].status, m["Z"][0].detail.is_none()),
            (CorrectorStatus::GapFilled, true)
        );
        // A gap_filled row gives a tide, like observed and interpolated ones.
        let e = parse(&format!(
            "{}\nZ,2026-06-14T13:20:00Z,,,gap_filled,,,,,,{detail}\n",
            ZONE_CORRECTOR_COLUMNS.join(",")
        ))
        .unwrap_err()
        .to_string();
        assert!(e.contains("c.csv:2: field 'tide_m'"), "{e}");
        // A detail on a row of another status.
        let e = parse(&format!(
            "{}\nL,2026-06-14T13:20:00Z,Z,1.2000,,observed,,,,,,{detail}\n",
            LINE_CORRECTOR_COLUMNS.join(",")
        ))
        .unwrap_err()
        .to_string();
        assert!(
            e.contains("c.csv:2: field 'status_detail'") && e.contains("'observed'"),
            "{e}"
        );
        // Per sounding: gap_filled with its detail; an unknown status word refused.
        let s = format!(
            "{}\nL,2026-06-14T13:20:00Z,s.csv,2,Z,1.2000,,gap_filled,,,,,,{detail}\nL,2026-06-14T13:20:01Z,s.csv,3,Z,1.2000,,reduced,,,,,,\n",
            SOUNDING_CORRECTOR_COLUMNS.join(",")
        );
        let CorrectionFile::Soundings(rows) = parse(&s).unwrap() else {
            panic!("per sounding")
        };
        let table = sounding_corrections(rows, &["Z"]);
        let filled: Vec<Option<String>> = [0.0, 1.0]
            .iter()
            .map(
                |dt| match &table[&sounding_key("L", 1_781_443_200.0 + dt)] {
                    SoundingCorrection::Tide { filled, .. } => {
                        filled.as_deref().map(str::to_string)
                    }
                    c => panic!("{c:?}"),
                },
            )
            .collect();
        assert_eq!(filled, [Some(detail.to_string()), None]);
        let e = parse(&format!(
            "{}\nL,2026-06-14T13:20:00Z,s.csv,2,Z,1.2000,,filled,,,,,,\n",
            SOUNDING_CORRECTOR_COLUMNS.join(",")
        ))
        .unwrap_err()
        .to_string();
        assert!(
            e.contains("c.csv:2: field 'status'") && e.contains("found 'filled'"),
            "{e}"
        );
    }
}
