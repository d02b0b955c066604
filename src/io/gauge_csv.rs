//! Reading a gauge's water-level record (CSV with a header line).
//!
//! Times: RFC 3339 / ISO 8601 with `Z` or an offset; naive times only with a configured offset.
//! Heights: in the gauge's declared unit, converted to metres and then to height above chart datum
//! with the gauge's `zero_above_datum_m`. Empty heights, heights listed in `null_values`, and rows
//! whose quality flag is not a good flag are skipped and counted, never invented. `NaN` and `inf`
//! are kept as samples for quality control to set aside by line (`out_of_band`), so that one bad
//! reading does not stop a run; [`GaugeRecord::increasing_series`] leaves them out too.

use std::path::Path;

use chrono::FixedOffset;

use super::error::{IoError, Position};
use super::project::GaugeSpec;
use super::timefmt::{parse_time, TimeFormat};
use crate::compute::qc::conflicting_duplicates;
use crate::compute::series::LevelSeries;

/// A gauge record as read: every sample with a time and a reading, in file order (times may
/// repeat or go back; quality control flags that).
#[derive(Debug, Clone, Default)]
pub struct GaugeRecord {
    /// Sample times, UTC seconds, file order.
    pub times_s: Vec<f64>,
    /// Levels above chart datum, metres, file order; `NaN` or ±infinity where the file has such a
    /// reading.
    pub heights_m: Vec<f64>,
    /// 1-based line of each sample in the file.
    pub lines: Vec<u64>,
    /// Rows skipped because the height was empty or a null value.
    pub skipped_null: usize,
    /// Rows skipped because their quality flag was not good.
    pub skipped_flagged: usize,
    /// The gauge's maximum gap, seconds.
    pub max_gap_s: f64,
    /// Rows that are not samples: (line, time in UTC seconds, `no_reading` or `flagged_in_file`).
    pub skipped_rows: Vec<(u64, f64, &'static str)>,
}

impl GaugeRecord {
    /// The samples whose time is later than every time before it, as a series: what a record
    /// gives when read without QC. Even so, a reading that is not a finite number never enters
    /// it, nor does either copy of a time written twice with different readings (keeping the
    /// first would be a guess).
    pub fn increasing_series(&self) -> LevelSeries {
        let mut s = LevelSeries {
            max_gap_s: self.max_gap_s,
            ..Default::default()
        };
        // Every copy of a time with two readings, a third copy repeating one of them included.
        let mut conflicting: Vec<f64> = conflicting_duplicates(&self.times_s, &self.heights_m)
            .iter()
            .map(|c| self.times_s[c.first])
            .collect();
        conflicting.sort_by(f64::total_cmp);
        for (&t, &h) in self.times_s.iter().zip(&self.heights_m) {
            if !h.is_finite() || conflicting.binary_search_by(|c| c.total_cmp(&t)).is_ok() {
                continue;
            }
            if s.times_s.last().is_none_or(|&p| t > p) {
                s.times_s.push(t);
                s.heights_m.push(h);
            }
        }
        s
    }
}

fn column(headers: &csv::StringRecord, name: &str, path: &Path) -> Result<usize, IoError> {
    headers
        .iter()
        .position(|h| h.trim() == name)
        .ok_or_else(|| {
            IoError::content(
                Position::file(path).line(1).field(name),
                format!(
                    "no such column in the header{} (columns: {})",
                    crate::compute::names::did_you_mean(crate::compute::names::nearest(
                        name,
                        headers.iter().map(str::trim)
                    )),
                    headers.iter().collect::<Vec<_>>().join(", ")
                ),
            )
        })
}

/// Reads a gauge record file for `spec`.
pub fn read_gauge_record(
    spec: &GaugeSpec,
    naive_offset: Option<FixedOffset>,
) -> Result<GaugeRecord, IoError> {
    let file = std::fs::File::open(&spec.record).map_err(|e| IoError::file(&spec.record, e))?;
    parse_gauge_record(
        std::io::BufReader::new(file),
        &spec.record,
        spec,
        naive_offset,
    )
}

/// Parses a gauge record from a reader, as if read from `path`.
pub fn parse_gauge_record<R: std::io::Read>(
    reader: R,
    path: &Path,
    spec: &GaugeSpec,
    naive_offset: Option<FixedOffset>,
) -> Result<GaugeRecord, IoError> {
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .trim(csv::Trim::All)
        .from_reader(reader);
    let headers = rdr.headers().map_err(|e| csv_error(e, path))?.clone();
    if headers.is_empty() || (headers.len() == 1 && headers[0].is_empty()) {
        return Err(IoError::content(
            Position::file(path),
            "the file is empty: expected a header line",
        ));
    }
    let i_time = column(&headers, &spec.time_column, path)?;
    let i_height = column(&headers, &spec.height_column, path)?;
    let i_flag = match &spec.flag_column {
        Some(f) => Some(column(&headers, f, path)?),
        None => None,
    };
    let scale = spec.units.metres_per_unit();
    let mut out = GaugeRecord {
        max_gap_s: spec.max_gap_min * 60.0,
        ..Default::default()
    };
    let mut rec = csv::StringRecord::new();
    loop {
        match rdr.read_record(&mut rec) {
            Ok(false) => break,
            Ok(true) => {}
            Err(e) => return Err(csv_error(e, path)),
        }
        let line = rec.position().map(|p| p.line()).unwrap_or(0);
        let at = |field: &str| Position::file(path).line(line).field(field.to_string());
        let get = |i: usize, name: &str| {
            rec.get(i).ok_or_else(|| {
                IoError::content(
                    at(name),
                    format!("missing: the row has {} fields", rec.len()),
                )
            })
        };
        let t_txt = get(i_time, &spec.time_column)?;
        let t = parse_time(t_txt, TimeFormat::Iso8601, naive_offset)
            .map_err(|m| IoError::content(at(&spec.time_column), m))?;
        if let Some(fi) = i_flag {
            let flag = get(fi, spec.flag_column.as_deref().unwrap_or(""))?;
            if !spec.good_flags.iter().any(|g| g == flag) {
                out.skipped_flagged += 1;
                out.skipped_rows.push((line, t, "flagged_in_file"));
                continue;
            }
        }
        let h_txt = get(i_height, &spec.height_column)?;
        if h_txt.is_empty() || spec.null_values.iter().any(|n| n == h_txt) {
            out.skipped_null += 1;
            out.skipped_rows.push((line, t, "no_reading"));
            continue;
        }
        let h: f64 = h_txt.parse().map_err(|_| {
            IoError::content(
                at(&spec.height_column),
                format!("expected a number, found '{h_txt}'"),
            )
        })?;
        out.times_s.push(t);
        out.heights_m.push(h * scale + spec.zero_above_datum_m);
        out.lines.push(line);
    }
    Ok(out)
}

/// Converts a csv error into a positioned error.
pub fn csv_error(e: csv::Error, path: &Path) -> IoError {
    let line = e.position().map(|p| p.line());
    let mut at = Position::file(path);
    at.line = line;
    match e.kind() {
        csv::ErrorKind::Io(_) => IoError::content(at, format!("read failed: {e}")),
        csv::ErrorKind::Utf8 { .. } => IoError::content(at, "the line is not valid UTF-8 text"),
        _ => IoError::content(at, e.to_string()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::project::HeightUnit;
    use std::path::PathBuf;

    fn spec() -> GaugeSpec {
        GaugeSpec {
            id: "g".into(),
            name: None,
            lon: 0.0,
            lat: 0.0,
            record: PathBuf::from("g.csv"),
            units: HeightUnit::Metre,
            zero_above_datum_m: -1.5,
            mean_level_above_datum_m: 2.0,
            max_gap_min: 30.0,
            time_column: "time".into(),
            height_column: "height".into(),
            flag_column: Some("qc".into()),
            good_flags: vec!["0".into()],
            null_values: vec!["-99".into()],
            naive_time_utc_offset: None,
            u_gauge_m: None,
            u_datum_m: None,
            interpolation: Default::default(),
            lowpass_cutoff_min: None,
            band_min_m: None,
            band_max_m: None,
            constants: None,
            datums: None,
        }
    }

    #[test]
    fn converts_to_chart_datum_and_counts_skips() {
        let text = "time,height,qc\n\
            2026-06-14T00:00:00Z,3.50,0\n\
            2026-06-14T00:06:00Z,,0\n\
            2026-06-14T00:12:00Z,-99,0\n\
            2026-06-14T00:18:00Z,3.70,4\n\
            2026-06-14T01:24:00+01:00,3.80,0\n";
        let r = parse_gauge_record(text.as_bytes(), Path::new("g.csv"), &spec(), None).unwrap();
        assert_eq!(r.heights_m, vec![2.0, 3.80 - 1.5]);
        assert_eq!(r.times_s[1] - r.times_s[0], 24.0 * 60.0);
        assert_eq!(r.lines, vec![2, 6]);
        assert_eq!((r.skipped_null, r.skipped_flagged), (2, 1));
    }

    #[test]
    fn feet_are_converted() {
        let mut s = spec();
        s.units = HeightUnit::Foot;
        s.zero_above_datum_m = 0.0;
        let text = "time,height,qc\n2026-06-14T00:00:00Z,10,0\n";
        let r = parse_gauge_record(text.as_bytes(), Path::new("g.csv"), &s, None).unwrap();
        assert!((r.heights_m[0] - 3.048).abs() < 1e-12);
    }

    #[test]
    fn errors_name_line_and_field() {
        let text = "time,height,qc\n2026-06-14T00:00:00Z,3.5,0\n2026-06-14T00:06:00Z,abc,0\n";
        let e = parse_gauge_record(text.as_bytes(), Path::new("g.csv"), &spec(), None).unwrap_err();
        assert_eq!(
            e.to_string(),
            "g.csv:3: field 'height': expected a number, found 'abc'"
        );
        let text = "time,level\n";
        let e = parse_gauge_record(text.as_bytes(), Path::new("g.csv"), &spec(), None).unwrap_err();
        assert!(
            e.to_string()
                .starts_with("g.csv:1: field 'height': no such column"),
            "{e}"
        );
        let text = "time,height,qc\n2026-06-14T00:00:00,3.5,0\n";
        let e = parse_gauge_record(text.as_bytes(), Path::new("g.csv"), &spec(), None).unwrap_err();
        assert!(e.to_string().contains("no UTC offset"), "{e}");
    }

    #[test]
    fn out_of_order_times_are_kept_in_file_order_for_quality_control() {
        let text = "time,height,qc\n\
            2026-06-14T00:06:00Z,3.5,0\n\
            2026-06-14T00:06:00Z,3.6,0\n\
            2026-06-14T00:00:00Z,3.6,0\n\
            2026-06-14T00:12:00Z,3.7,0\n";
        let r = parse_gauge_record(text.as_bytes(), Path::new("g.csv"), &spec(), None).unwrap();
        assert_eq!(r.times_s.len(), 4);
        assert_eq!(r.lines, vec![2, 3, 4, 5]);
        // Read without QC: 00:06 is written twice with different readings, so neither copy is
        // used; 00:00 comes after it in the file but is then the earliest time.
        let s = r.increasing_series();
        assert_eq!(s.heights_m, vec![3.6 - 1.5, 3.7 - 1.5]);
        assert_eq!(s.times_s[1] - s.times_s[0], 12.0 * 60.0);
    }

    #[test]
    fn readings_that_are_not_finite_are_kept_for_quality_control_but_never_used_without_it() {
        let text = "time,height,qc\n\
            2026-06-14T00:00:00Z,3.5,0\n\
            2026-06-14T00:06:00Z,NaN,0\n\
            2026-06-14T00:12:00Z,inf,0\n\
            2026-06-14T00:18:00Z,-inf,0\n\
            2026-06-14T00:24:00Z,3.6,0\n\
            2026-06-14T00:24:00Z,3.6,0\n\
            2026-06-14T00:30:00Z,3.7,0\n\
            2026-06-14T00:30:00Z,3.8,0\n\
            2026-06-14T00:30:00Z,3.7,0\n";
        let r = parse_gauge_record(text.as_bytes(), Path::new("g.csv"), &spec(), None).unwrap();
        assert_eq!(r.lines, vec![2, 3, 4, 5, 6, 7, 8, 9, 10]);
        assert!(r.heights_m[1].is_nan());
        assert_eq!(r.heights_m[2], f64::INFINITY);
        assert_eq!(r.heights_m[3], f64::NEG_INFINITY);
        // Without QC: the finite readings and one copy of the row written twice; no copy of
        // 00:30, which has two readings (the third copy repeats the first).
        let s = r.increasing_series();
        assert_eq!(s.heights_m, vec![3.5 - 1.5, 3.6 - 1.5]);
    }
}
