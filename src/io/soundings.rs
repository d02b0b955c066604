//! Reading soundings as a stream of line chunks, and parsing one line.
//!
//! A soundings file is CSV (comma, semicolon or tab) or whitespace-delimited text, one sounding
//! per line, with or without a header. The column mapping comes from the project file; a column is
//! named by its header text or as `#N` (1-based); a name two columns carry is refused. A UTF-8
//! byte-order mark is ignored, a first line with NUL bytes (UTF-16) is refused, and CRLF line
//! ends are accepted. A quoted field may contain the delimiter but not a line break.
//!
//! Files are read in chunks of whole lines ([`ChunkReader`]) so that chunks can be parsed in
//! parallel and no file is ever held in memory whole.

use std::io::Read;
use std::path::Path;

use chrono::FixedOffset;

use super::error::{IoError, Position};
use super::project::{Delimiter, DepthSign, ExtraFields, SoundingsSpec};
use super::timefmt::{parse_time, TimeFormat};

/// Bytes per chunk handed to a worker (a chunk is cut at the last line end before this size).
pub const CHUNK_BYTES: usize = 256 * 1024;

/// A run of whole lines from a file.
#[derive(Debug, Default)]
pub struct Chunk {
    /// 1-based line number of the first line in `data`.
    pub first_line: u64,
    /// The bytes, ending with a line end (except possibly at the end of the file).
    pub data: Vec<u8>,
}

/// Reads a file as chunks of whole lines.
pub struct ChunkReader<R: Read> {
    inner: R,
    carry: Vec<u8>,
    next_line: u64,
    eof: bool,
    started: bool,
}

/// A reader that can compute the SHA-256 of every byte read through it, so that a file read
/// once for its soundings also gives its provenance hash.
pub struct HashingReader<R: Read> {
    inner: R,
    hasher: Option<sha2::Sha256>,
}

impl<R: Read> HashingReader<R> {
    /// Wraps `inner`; hashes only when `hash` is true.
    pub fn new(inner: R, hash: bool) -> Self {
        use sha2::Digest;
        HashingReader {
            inner,
            hasher: hash.then(sha2::Sha256::new),
        }
    }

    /// The SHA-256 (hex) of what was read, when hashing.
    pub fn sha256_hex(self) -> Option<String> {
        use sha2::Digest;
        self.hasher
            .map(|h| h.finalize().iter().map(|b| format!("{b:02x}")).collect())
    }
}

impl<R: Read> Read for HashingReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        use sha2::Digest;
        let n = self.inner.read(buf)?;
        if let Some(h) = self.hasher.as_mut() {
            h.update(&buf[..n]);
        }
        Ok(n)
    }
}

impl<R: Read> ChunkReader<R> {
    /// The reader it wraps.
    pub fn into_inner(self) -> R {
        self.inner
    }

    /// Wraps a reader; line numbering starts at `first_line`.
    pub fn new(inner: R, first_line: u64) -> Self {
        ChunkReader {
            inner,
            carry: Vec::new(),
            next_line: first_line,
            eof: false,
            started: false,
        }
    }

    /// The next chunk, or `None` at the end. `buf` is reused for the data.
    pub fn next_chunk(&mut self, mut buf: Vec<u8>) -> std::io::Result<Option<Chunk>> {
        buf.clear();
        buf.append(&mut self.carry);
        while !self.eof && buf.len() < CHUNK_BYTES {
            let start = buf.len();
            buf.resize(start + CHUNK_BYTES, 0);
            let n = loop {
                match self.inner.read(&mut buf[start..]) {
                    Ok(n) => break n,
                    Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                    Err(e) => return Err(e),
                }
            };
            buf.truncate(start + n);
            if n == 0 {
                self.eof = true;
            }
        }
        if !self.started {
            self.started = true;
            if buf.starts_with(b"\xEF\xBB\xBF") {
                buf.drain(..3);
            }
        }
        if buf.is_empty() {
            return Ok(None);
        }
        if !self.eof {
            // Cut after the last line end; keep the rest for the next chunk. A single line longer
            // than the buffer grows the buffer until its end is found.
            match memchr_last(b'\n', &buf) {
                Some(i) => {
                    self.carry.extend_from_slice(&buf[i + 1..]);
                    buf.truncate(i + 1);
                }
                None => {
                    self.carry = std::mem::take(&mut buf);
                    return self.next_chunk_growing();
                }
            }
        }
        let first_line = self.next_line;
        self.next_line += count_lines(&buf);
        Ok(Some(Chunk {
            first_line,
            data: buf,
        }))
    }

    fn next_chunk_growing(&mut self) -> std::io::Result<Option<Chunk>> {
        let mut buf = std::mem::take(&mut self.carry);
        loop {
            let start = buf.len();
            buf.resize(start + CHUNK_BYTES, 0);
            let n = self.inner.read(&mut buf[start..])?;
            buf.truncate(start + n);
            if n == 0 {
                self.eof = true;
                break;
            }
            if let Some(i) = memchr_last(b'\n', &buf[start..]) {
                let cut = start + i + 1;
                self.carry.extend_from_slice(&buf[cut..]);
                buf.truncate(cut);
                break;
            }
        }
        let first_line = self.next_line;
        self.next_line += count_lines(&buf);
        Ok(Some(Chunk {
            first_line,
            data: buf,
        }))
    }
}

fn memchr_last(b: u8, s: &[u8]) -> Option<usize> {
    memchr::memrchr(b, s)
}

fn count_lines(s: &[u8]) -> u64 {
    let n = memchr::memchr_iter(b'\n', s).count() as u64;
    if s.last().is_some_and(|&c| c != b'\n') {
        n + 1
    } else {
        n
    }
}

/// Iterates over the lines of a chunk with their numbers, without line ends (`\n` or `\r\n`).
pub fn lines_of(chunk: &Chunk) -> impl Iterator<Item = (u64, &[u8])> {
    let data: &[u8] = if chunk.data.last() == Some(&b'\n') {
        &chunk.data[..chunk.data.len() - 1]
    } else {
        &chunk.data
    };
    let mut start = 0usize;
    let mut line = chunk.first_line;
    let mut ends = memchr::memchr_iter(b'\n', data);
    let mut finished = chunk.data.is_empty();
    std::iter::from_fn(move || {
        if finished {
            return None;
        }
        let end = match ends.next() {
            Some(e) => e,
            None => {
                finished = true;
                data.len()
            }
        };
        let l = &data[start..end];
        let l = l.strip_suffix(b"\r").unwrap_or(l);
        let item = (line, l);
        start = end + 1;
        line += 1;
        Some(item)
    })
}

/// The fields of one line.
#[derive(Debug, Default)]
pub struct Fields {
    ranges: Vec<(usize, usize)>,
    quoted: Option<csv::StringRecord>,
    /// Index of the field whose opening quote is never closed on the line.
    unclosed_quote: Option<usize>,
}

impl Fields {
    /// Splits `line` by `delim` into this buffer.
    pub fn split(&mut self, line: &str, delim: Delimiter) {
        self.ranges.clear();
        self.quoted = None;
        self.unclosed_quote = None;
        let sep = match delim {
            Delimiter::Whitespace => {
                let base = line.as_ptr() as usize;
                for f in line.split_ascii_whitespace() {
                    let s = f.as_ptr() as usize - base;
                    self.ranges.push((s, s + f.len()));
                }
                return;
            }
            Delimiter::Comma => b',',
            Delimiter::Semicolon => b';',
            Delimiter::Tab => b'\t',
        };
        if line.as_bytes().contains(&b'"') {
            self.unclosed_quote = unclosed_quote_field(line.as_bytes(), sep);
            let mut rdr = csv::ReaderBuilder::new()
                .has_headers(false)
                .delimiter(sep)
                .flexible(true)
                .from_reader(line.as_bytes());
            let mut rec = csv::StringRecord::new();
            if rdr.read_record(&mut rec).unwrap_or(false) {
                self.quoted = Some(rec);
                return;
            }
        }
        let mut start = 0;
        for (i, &c) in line.as_bytes().iter().enumerate() {
            if c == sep {
                self.ranges.push((start, i));
                start = i + 1;
            }
        }
        self.ranges.push((start, line.len()));
    }

    /// Index of the field whose opening quote is never closed, when one is not.
    pub fn unclosed_quote(&self) -> Option<usize> {
        self.unclosed_quote
    }

    /// Number of fields.
    pub fn len(&self) -> usize {
        match &self.quoted {
            Some(r) => r.len(),
            None => self.ranges.len(),
        }
    }

    /// Whether the line had no field.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Field `i` (trimmed), when present.
    pub fn get<'a>(&'a self, line: &'a str, i: usize) -> Option<&'a str> {
        match &self.quoted {
            Some(r) => r.get(i).map(str::trim_ascii),
            None => self.ranges.get(i).map(|&(s, e)| line[s..e].trim_ascii()),
        }
    }
}

/// A hint for a coordinate written in degrees and minutes or with a hemisphere letter.
fn sexagesimal_hint(s: &str) -> &'static str {
    let t = s.trim_end();
    let lettered = t.len() > 1
        && t.ends_with(['N', 'S', 'E', 'W', 'n', 's', 'e', 'w'])
        && t[..t.len() - 1].trim_end().parse::<f64>().is_ok();
    if s.contains(['°', '\'', '"']) || lettered {
        ": write decimal degrees, negative west and south (e.g. -36.1), not degrees-minutes or a hemisphere letter"
    } else {
        ""
    }
}

/// The index of the field in which a quote opens that the line never closes (a doubled quote
/// inside a quoted field is an escaped quote, RFC 4180).
fn unclosed_quote_field(line: &[u8], sep: u8) -> Option<usize> {
    let (mut field, mut in_quote, mut opened_in) = (0usize, false, 0usize);
    let mut i = 0;
    while i < line.len() {
        let c = line[i];
        if in_quote {
            if c == b'"' {
                if line.get(i + 1) == Some(&b'"') {
                    i += 1;
                } else {
                    in_quote = false;
                }
            }
        } else if c == b'"' {
            in_quote = true;
            opened_in = field;
        } else if c == sep {
            field += 1;
        }
        i += 1;
    }
    in_quote.then_some(opened_in)
}

/// A sounding's values as parsed from its line.
#[derive(Debug, Clone, PartialEq)]
pub struct SoundingValues<'a> {
    /// UTC seconds.
    pub t_s: f64,
    /// Easting or longitude, in the group's CRS.
    pub x: f64,
    /// Northing or latitude, in the group's CRS.
    pub y: f64,
    /// Observed depth below the water surface, metres, positive down.
    pub depth_m: f64,
    /// Survey line identifier ("" when the file has none).
    pub line_id: &'a str,
    /// Per-sounding standard uncertainty of the depth, metres.
    pub u_depth_m: Option<f64>,
}

/// Deepest plausible depth, metres: the deepest ocean trench is about 11 km deep (common
/// knowledge), so anything beyond 12 km is a broken value.
pub const MAX_PLAUSIBLE_DEPTH_M: f64 = 12_000.0;

/// Largest plausible standard uncertainty of a depth, metres: a tenth of the deepest plausible
/// depth, far beyond any echo sounder's (IHO S-44 Ed. 6.1.0's loosest order, 2, allows
/// sqrt(1² + (0.023·d)²) m at 95 %, about 276 m at 12 km); a larger value is a no-data marker
/// (3.4e38, 1e14, …), not an uncertainty.
pub const MAX_PLAUSIBLE_U_DEPTH_M: f64 = 1_200.0;

/// Earliest plausible sounding time, UTC seconds: 1980-01-01T00:00:00Z, the start of GPS time
/// (common practice: positioned, timestamped soundings need satellite positioning).
pub const MIN_PLAUSIBLE_TIME_S: f64 = 315_532_800.0;

/// Latest plausible sounding time, UTC seconds: 2100-01-01T00:00:00Z. A fixed bound (not the
/// clock of the run) keeps reruns byte-identical; it catches times in milliseconds or a
/// logger's broken clock.
pub const MAX_PLAUSIBLE_TIME_S: f64 = 4_102_444_800.0;

/// Largest coordinate magnitude that a projected CRS gives on Earth, metres (half the
/// equator is about 20 000 km): a value beyond ±180° but within this looks projected.
const MAX_PROJECTED_M: f64 = 2.0e7;

/// Smallest coordinate magnitude taken to look projected, metres: below it a value beyond the
/// geographic range is more likely a typing error than an easting or northing.
const MIN_PROJECTED_M: f64 = 1000.0;

/// A field value as quoted in a message: at most 40 characters.
pub fn clip(s: &str) -> String {
    if s.chars().count() <= 40 {
        s.to_string()
    } else {
        let head: String = s.chars().take(40).collect();
        format!("{head}… ({} bytes)", s.len())
    }
}

/// Why a line is not a sounding: the field (column name) and what was wrong.
#[derive(Debug, Clone, PartialEq)]
pub struct RowProblem {
    /// Column name.
    pub field: String,
    /// What was expected and found.
    pub message: String,
}

/// A soundings group's layout resolved against a file's header.
#[derive(Debug, Clone)]
pub struct SoundingLayout {
    /// Field separator.
    pub delimiter: Delimiter,
    /// Whether line 1 is a header.
    pub has_header: bool,
    /// Column names (from the header, or `col1..colN`).
    pub column_names: Vec<String>,
    time: usize,
    x: usize,
    y: usize,
    depth: usize,
    line: Option<usize>,
    u_depth: Option<usize>,
    time_format: TimeFormat,
    depth_sign: DepthSign,
    naive_offset: Option<FixedOffset>,
    extra_allowed: bool,
    /// The CRS text when it is geographic (longitude, latitude), for the range check.
    geographic_crs: Option<String>,
}

/// The encoding a first line with NUL bytes looks like (lossily decoded: a byte-order mark
/// shows as replacement characters).
fn nul_encoding(first_line: &str) -> &'static str {
    let body = first_line.trim_start_matches('\u{FFFD}');
    if body.contains("\0\0\0") {
        "UTF-32"
    } else if body.starts_with('\0') {
        "UTF-16 BE"
    } else {
        "UTF-16 LE"
    }
}

/// "4 and 5", "4, 5 and 7": 1-based column positions.
fn positions_text(pos: &[usize]) -> String {
    let n: Vec<String> = pos.iter().map(|i| (i + 1).to_string()).collect();
    match n.split_last() {
        Some((last, rest)) if !rest.is_empty() => format!("{} and {last}", rest.join(", ")),
        _ => n.join(""),
    }
}

impl SoundingLayout {
    /// Resolves the column mapping of `spec` against the file's first line.
    pub fn resolve(
        spec: &SoundingsSpec,
        first_line: Option<&str>,
        naive_offset: Option<FixedOffset>,
        path: &Path,
    ) -> Result<Self, IoError> {
        let first_line = first_line
            .ok_or_else(|| IoError::content(Position::file(path), "the file is empty"))?;
        if first_line.contains('\0') {
            return Err(IoError::content(
                Position::file(path).line(1),
                format!(
                    "the line holds NUL bytes: the file looks like {} text, not UTF-8; save it as UTF-8",
                    nul_encoding(first_line)
                ),
            ));
        }
        let mut f = Fields::default();
        f.split(first_line, spec.delimiter);
        let names: Vec<String> = if spec.header {
            (0..f.len())
                .map(|i| f.get(first_line, i).unwrap_or("").to_string())
                .collect()
        } else {
            (1..=f.len()).map(|i| format!("col{i}")).collect()
        };
        if spec.header && (names.len() < 2) {
            let hint = if spec.delimiter != Delimiter::Whitespace
                && first_line.contains([';', '\t', ' '])
            {
                " — is the delimiter right?"
            } else {
                ""
            };
            return Err(IoError::content(
                Position::file(path).line(1),
                format!(
                    "the header has {} column(s) when split by {:?}{hint}",
                    names.len(),
                    spec.delimiter
                ),
            ));
        }
        Self::from_names(spec, names, naive_offset, path)
    }

    /// Resolves the column mapping of `spec` against the column names `names` (a CSV file's
    /// header, or a Parquet file's schema).
    pub fn from_names(
        spec: &SoundingsSpec,
        names: Vec<String>,
        naive_offset: Option<FixedOffset>,
        path: &Path,
    ) -> Result<Self, IoError> {
        let find = |key: &str, want: &str| -> Result<usize, IoError> {
            if let Some(n) = want.strip_prefix('#') {
                let i: usize = n.parse().map_err(|_| {
                    IoError::content(
                        Position::file(path).field(format!("columns.{key}")),
                        format!("expected #N with N a column number, found '{want}'"),
                    )
                })?;
                if i == 0 || i > names.len() {
                    return Err(IoError::content(
                        Position::file(path).line(1).field(want),
                        format!(
                            "column {i} does not exist: the file has {} columns",
                            names.len()
                        ),
                    ));
                }
                return Ok(i - 1);
            }
            let found: Vec<usize> = (0..names.len()).filter(|&i| names[i] == want).collect();
            if found.len() > 1 {
                return Err(IoError::content(
                    Position::file(path).line(1).field(want),
                    format!(
                        "the mapping for '{key}' is ambiguous: columns {} of the header have the same name '{want}'; rename all but one, or map one by position (e.g. \"#{}\")",
                        positions_text(&found),
                        found[0] + 1
                    ),
                ));
            }
            found.first().copied().ok_or_else(|| {
                IoError::content(
                    Position::file(path).line(1).field(want),
                    format!(
                        "no such column for '{key}' in the header{} (columns: {})",
                        crate::compute::names::did_you_mean(crate::compute::names::nearest(
                            want,
                            names.iter().map(String::as_str)
                        )),
                        names.join(", ")
                    ),
                )
            })
        };
        let c = &spec.columns;
        Ok(SoundingLayout {
            delimiter: spec.delimiter,
            has_header: spec.header,
            time: find("time", &c.time)?,
            x: find("x", &c.x)?,
            y: find("y", &c.y)?,
            depth: find("depth", &c.depth)?,
            line: c.line.as_deref().map(|l| find("line", l)).transpose()?,
            u_depth: c
                .u_depth
                .as_deref()
                .map(|l| find("u_depth", l))
                .transpose()?,
            time_format: spec.time_format,
            depth_sign: spec.depth_sign,
            naive_offset,
            extra_allowed: spec.extra_trailing_fields == ExtraFields::Allowed,
            geographic_crs: crate::io::crs::is_wgs84_lonlat(&spec.crs).then(|| spec.crs.clone()),
            column_names: names,
        })
    }

    /// Index of the survey-line column, when mapped.
    pub fn line_column(&self) -> Option<usize> {
        self.line
    }

    /// Whether the group's CRS is WGS 84 longitude and latitude.
    pub fn is_lonlat(&self) -> bool {
        self.geographic_crs.is_some()
    }

    /// Whether rows may have fields after the header's last column.
    pub fn extra_fields_allowed(&self) -> bool {
        self.extra_allowed
    }

    /// Whether the file has a per-sounding depth uncertainty column.
    pub fn has_u_depth(&self) -> bool {
        self.u_depth.is_some()
    }

    /// Whether the file has a survey line column.
    pub fn has_line_column(&self) -> bool {
        self.line.is_some()
    }

    /// The indices of the mapped columns.
    pub fn mapped_columns(&self) -> MappedColumns {
        MappedColumns {
            time: self.time,
            x: self.x,
            y: self.y,
            depth: self.depth,
            line: self.line,
            u_depth: self.u_depth,
        }
    }

    /// Whether times are Unix seconds (`time_format = "unix_s"`).
    pub fn time_is_unix_s(&self) -> bool {
        self.time_format == TimeFormat::UnixS
    }

    /// The naive-time offset (local time to UTC) the project gives, if any.
    pub fn naive_offset(&self) -> Option<FixedOffset> {
        self.naive_offset
    }

    /// What each column holds for its typed (Parquet) form: the mapped time a timestamp, the
    /// mapped coordinates, depth and depth uncertainty numbers, every other column text.
    pub fn text_kinds(&self) -> Vec<crate::io::columnar::TextKind> {
        use crate::io::columnar::TextKind;
        (0..self.column_names.len())
            .map(|i| {
                if i == self.time {
                    TextKind::Time
                } else if i == self.x || i == self.y || i == self.depth || Some(i) == self.u_depth {
                    TextKind::Number
                } else {
                    TextKind::Text
                }
            })
            .collect()
    }

    /// The value of number column `i` of a parsed row as the file wrote it (the depth with the
    /// file's sign), when `i` is a mapped number column.
    pub fn written_number(&self, i: usize, v: &SoundingValues) -> Option<f64> {
        if i == self.x {
            Some(v.x)
        } else if i == self.y {
            Some(v.y)
        } else if i == self.depth {
            Some(match self.depth_sign {
                DepthSign::PositiveUp => -v.depth_m,
                _ => v.depth_m,
            })
        } else if Some(i) == self.u_depth {
            v.u_depth_m
        } else {
            None
        }
    }

    /// A time text read as the layout's time format says, or why it cannot be.
    pub fn time_text_checked(&self, s: &str) -> Result<f64, RowProblem> {
        parse_time(s, self.time_format, self.naive_offset).map_err(|m| RowProblem {
            field: self.column_names[self.time].clone(),
            message: if s.len() > 60 {
                format!("expected a time, found '{}'", clip(s))
            } else {
                m.to_string()
            },
        })
    }

    /// A time field read on its own (for a row that cannot be parsed as a whole).
    pub fn time_text(&self, s: &str) -> Option<f64> {
        parse_time(s, self.time_format, self.naive_offset).ok()
    }

    /// The position of a row that cannot be parsed as a whole, when its x and y fields read as
    /// finite numbers: so that an unreadable row can still be placed on a map.
    pub fn position_text(&self, line: &str, fields: &Fields) -> Option<(f64, f64)> {
        let num = |i: usize| {
            fields
                .get(line, i)?
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
        };
        Some((num(self.x)?, num(self.y)?))
    }

    /// The survey line field of a row as written (trimmed), when the layout has a line column
    /// and the row that field: for a row that cannot be parsed as a whole.
    pub fn line_text<'a>(&self, line: &'a str, fields: &'a Fields) -> Option<&'a str> {
        self.line.and_then(|i| fields.get(line, i))
    }

    /// Parses one data line already split into `fields`.
    pub fn parse<'a>(
        &'a self,
        line: &'a str,
        fields: &'a Fields,
    ) -> Result<SoundingValues<'a>, RowProblem> {
        let get = |i: usize| -> Result<&'a str, RowProblem> {
            fields.get(line, i).ok_or_else(|| RowProblem {
                field: self.column_names[i].clone(),
                message: format!(
                    "missing: the row has {} fields, the header {}",
                    fields.len(),
                    self.column_names.len()
                ),
            })
        };
        let number = |i: usize, what: &str| -> Result<f64, RowProblem> {
            let s = get(i)?;
            let v: f64 = s.parse().map_err(|_| RowProblem {
                field: self.column_names[i].clone(),
                message: format!(
                    "expected {what}, found '{}'{}",
                    clip(s),
                    sexagesimal_hint(s)
                ),
            })?;
            if v.is_finite() {
                Ok(v)
            } else {
                Err(RowProblem {
                    field: self.column_names[i].clone(),
                    message: format!("expected {what} (finite), found '{}'", clip(s)),
                })
            }
        };
        let (n, h) = (fields.len(), self.column_names.len());
        if let Some(i) = fields.unclosed_quote() {
            return Err(RowProblem {
                field: self
                    .column_names
                    .get(i)
                    .cloned()
                    .unwrap_or_else(|| format!("#{}", i + 1)),
                message: "a quote opens here that the line never closes: the rest of the line would be read as one field".into(),
            });
        }
        if n < h {
            return Err(RowProblem {
                field: self.column_names[n].clone(),
                message: format!("missing: the row has {n} fields, the header {h}"),
            });
        }
        if n > h && !self.extra_allowed {
            return Err(RowProblem {
                field: format!("#{}", h + 1),
                message: format!(
                    "the row has {n} fields, the header {h}: was a field split (an unquoted thousands separator or decimal comma)? If trailing fields are expected, set extra_trailing_fields = \"allowed\""
                ),
            });
        }
        let t_txt = get(self.time)?;
        let t_s =
            parse_time(t_txt, self.time_format, self.naive_offset).map_err(|m| RowProblem {
                field: self.column_names[self.time].clone(),
                message: if t_txt.len() > 60 {
                    format!("expected a time, found '{}'", clip(t_txt))
                } else {
                    m.to_string()
                },
            })?;
        let x = number(self.x, "a coordinate")?;
        let y = number(self.y, "a coordinate")?;
        let depth = number(self.depth, "a depth in metres")?;
        let line_id = match self.line {
            Some(i) => get(i)?,
            None => "",
        };
        let u_depth = match self.u_depth {
            Some(i) => Some(number(i, "a standard uncertainty in metres")?),
            None => None,
        };
        self.check(
            RawValues {
                t_s,
                x,
                y,
                depth_as_written_m: depth,
                line_id,
                u_depth_m: u_depth,
            },
            |i| clip(fields.get(line, i).unwrap_or("")),
        )
    }

    /// Checks a row's values read from its fields (or typed columns) and gives the sounding:
    /// a plausible time, coordinates within the geographic range when the CRS is geographic,
    /// a plausible depth (turned positive down) and depth uncertainty. `written(i)` gives the
    /// value of column `i` as the file holds it, for the messages.
    pub fn check<'a>(
        &self,
        raw: RawValues<'a>,
        written: impl Fn(usize) -> String,
    ) -> Result<SoundingValues<'a>, RowProblem> {
        let t_s = raw.t_s;
        if !(MIN_PLAUSIBLE_TIME_S..MAX_PLAUSIBLE_TIME_S).contains(&t_s) {
            let plausible = |t: f64| (MIN_PLAUSIBLE_TIME_S..MAX_PLAUSIBLE_TIME_S).contains(&t);
            let hint = if plausible(t_s / 1000.0) {
                let as_ms = chrono::DateTime::from_timestamp_millis(t_s as i64)
                    .map(|d| d.format("%Y-%m-%dT%H:%M:%SZ").to_string())
                    .unwrap_or_default();
                format!(": Unix milliseconds? (divided by 1000 it would be {as_ms})")
            } else {
                String::new()
            };
            return Err(RowProblem {
                field: self.column_names[self.time].clone(),
                message: format!(
                    "time '{}' is outside the plausible span 1980-01-01 to 2100-01-01{hint}",
                    written(self.time)
                ),
            });
        }
        let (x, y) = (raw.x, raw.y);
        if let Some(crs) = &self.geographic_crs {
            for (i, v, what, lim) in [
                (self.x, x, "longitude", 180.0),
                (self.y, y, "latitude", 90.0),
            ] {
                if v.abs() > lim {
                    let hint = if (MIN_PROJECTED_M..=MAX_PROJECTED_M).contains(&v.abs()) {
                        ": the values look projected (easting, northing); is the group's crs right?"
                    } else {
                        ""
                    };
                    return Err(RowProblem {
                        field: self.column_names[i].clone(),
                        message: format!(
                            "'{}' cannot be a {what} in {crs} (beyond ±{lim}°){hint}",
                            written(i)
                        ),
                    });
                }
            }
        }
        let mut depth_m = raw.depth_as_written_m;
        if self.depth_sign == DepthSign::PositiveUp {
            depth_m = -depth_m;
        }
        if depth_m.abs() > MAX_PLAUSIBLE_DEPTH_M {
            return Err(RowProblem {
                field: self.column_names[self.depth].clone(),
                message: format!(
                    "'{}' is not a plausible depth in metres (beyond ±{MAX_PLAUSIBLE_DEPTH_M} m)",
                    written(self.depth)
                ),
            });
        }
        let u_depth_m = match (self.u_depth, raw.u_depth_m) {
            (Some(i), Some(u)) => {
                if u < 0.0 {
                    return Err(RowProblem {
                        field: self.column_names[i].clone(),
                        message: format!("a standard uncertainty cannot be negative, found {u}"),
                    });
                }
                if u > MAX_PLAUSIBLE_U_DEPTH_M {
                    return Err(RowProblem {
                        field: self.column_names[i].clone(),
                        message: format!(
                            "'{}' is not a plausible standard uncertainty of a depth in metres (above {MAX_PLAUSIBLE_U_DEPTH_M} m): a no-data value?",
                            written(i)
                        ),
                    });
                }
                Some(u)
            }
            _ => None,
        };
        Ok(SoundingValues {
            t_s,
            x,
            y,
            depth_m,
            line_id: raw.line_id,
            u_depth_m,
        })
    }
}

/// The column indices a layout maps.
#[derive(Debug, Clone, Copy)]
pub struct MappedColumns {
    /// Time.
    pub time: usize,
    /// Easting or longitude.
    pub x: usize,
    /// Northing or latitude.
    pub y: usize,
    /// Depth.
    pub depth: usize,
    /// Survey line.
    pub line: Option<usize>,
    /// Depth uncertainty.
    pub u_depth: Option<usize>,
}

/// A row's values as read, before [`SoundingLayout::check`]: the depth with the file's sign.
#[derive(Debug, Clone, Copy)]
pub struct RawValues<'a> {
    /// UTC seconds.
    pub t_s: f64,
    /// Easting or longitude.
    pub x: f64,
    /// Northing or latitude.
    pub y: f64,
    /// The depth as written, metres (sign as the group's `depth_sign`).
    pub depth_as_written_m: f64,
    /// Survey line ("" when none).
    pub line_id: &'a str,
    /// Standard uncertainty (1 sigma) of the depth, metres, when mapped.
    pub u_depth_m: Option<f64>,
}

/// Appends one field to a CSV line held in a `String`, quoting it when needed.
pub fn push_csv_field_string(out: &mut String, field: &str) {
    if field.contains([',', '"', '\n', '\r']) {
        out.push('"');
        out.push_str(&field.replace('"', "\"\""));
        out.push('"');
    } else {
        out.push_str(field);
    }
}

/// Appends one field to a CSV line, quoting it when needed.
pub fn push_csv_field(out: &mut Vec<u8>, field: &str) {
    if field
        .bytes()
        .any(|c| matches!(c, b',' | b'"' | b'\n' | b'\r'))
    {
        out.push(b'"');
        for c in field.bytes() {
            if c == b'"' {
                out.push(b'"');
            }
            out.push(c);
        }
        out.push(b'"');
    } else {
        out.extend_from_slice(field.as_bytes());
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::project::ColumnMap;
    use std::path::PathBuf;

    #[test]
    fn an_unclosed_quote_is_found_in_its_field() {
        // RFC 4180: a doubled quote inside a quoted field is a quote, not its end.
        assert_eq!(unclosed_quote_field(b"a,\"b,c", b','), Some(1));
        assert_eq!(unclosed_quote_field(b"a,\"b,c\",d", b','), None);
        assert_eq!(unclosed_quote_field(b"\"x\"\"y\",\"z", b','), Some(1));
        assert_eq!(unclosed_quote_field(b"\"x\"\"y,z", b','), Some(0));
        assert_eq!(unclosed_quote_field(b"a;b;\"c", b';'), Some(2));
    }

    fn spec(delim: Delimiter) -> SoundingsSpec {
        SoundingsSpec {
            files: vec![PathBuf::from("s.csv")],
            crs: "EPSG:4326".into(),
            delimiter: delim,
            header: true,
            time_format: TimeFormat::Iso8601,
            depth_sign: DepthSign::PositiveDown,
            extra_trailing_fields: ExtraFields::Refused,
            columns: ColumnMap {
                time: "time".into(),
                x: "lon".into(),
                y: "lat".into(),
                depth: "depth".into(),
                line: Some("line".into()),
                u_depth: None,
            },
        }
    }

    #[test]
    fn a_hashing_reader_gives_the_hash_of_every_byte_even_a_stripped_bom() {
        let mut text = Vec::from(&b"\xEF\xBB\xBFh\r\n"[..]);
        for i in 0..300_000 {
            text.extend_from_slice(format!("{i},x\n").as_bytes());
        }
        let mut r = ChunkReader::new(HashingReader::new(&text[..], true), 1);
        while r.next_chunk(Vec::new()).unwrap().is_some() {}
        let got = r.into_inner().sha256_hex().unwrap();
        use sha2::Digest;
        let want: String = sha2::Sha256::digest(&text)
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        assert_eq!(got, want);
        assert!(HashingReader::new(&text[..], false).sha256_hex().is_none());
    }

    #[test]
    fn chunks_are_whole_lines_and_numbered() {
        let mut text = Vec::from(&b"\xEF\xBB\xBFh\r\n"[..]);
        for i in 0..100_000 {
            text.extend_from_slice(format!("{i},x\r\n").as_bytes());
        }
        text.extend_from_slice(b"last"); // no final line end
        let mut r = ChunkReader::new(&text[..], 1);
        let mut all = Vec::new();
        while let Some(c) = r.next_chunk(Vec::new()).unwrap() {
            assert!(c.data.ends_with(b"\n") || c.data.ends_with(b"last"));
            for (n, l) in lines_of(&c) {
                all.push((n, String::from_utf8(l.to_vec()).unwrap()));
            }
        }
        assert_eq!(all.len(), 100_002);
        assert_eq!(all[0], (1, "h".to_string()));
        assert_eq!(all[5], (6, "4,x".to_string()));
        assert_eq!(all[100_001], (100_002, "last".to_string()));
    }

    #[test]
    fn a_line_longer_than_a_chunk_is_kept_whole() {
        let long = "9".repeat(3 * CHUNK_BYTES);
        let text = format!("a\n{long}\nb\n");
        let mut r = ChunkReader::new(text.as_bytes(), 1);
        let mut lines = Vec::new();
        while let Some(c) = r.next_chunk(Vec::new()).unwrap() {
            for (n, l) in lines_of(&c) {
                lines.push((n, l.len()));
            }
        }
        assert_eq!(lines, vec![(1, 1), (2, 3 * CHUNK_BYTES), (3, 1)]);
    }

    #[test]
    fn parses_csv_and_whitespace_rows() {
        let p = Path::new("s.csv");
        let lay = SoundingLayout::resolve(
            &spec(Delimiter::Comma),
            Some("time,lon,lat,depth,line"),
            None,
            p,
        )
        .unwrap();
        let mut f = Fields::default();
        let line = "2026-06-14T09:30:00Z,-36.1,-47.5,12.34,\"A,1\"";
        f.split(line, Delimiter::Comma);
        let v = lay.parse(line, &f).unwrap();
        assert_eq!(
            (v.x, v.y, v.depth_m, v.line_id),
            (-36.1, -47.5, 12.34, "A,1")
        );
        let mut sp = spec(Delimiter::Whitespace);
        sp.depth_sign = DepthSign::PositiveUp;
        let lay = SoundingLayout::resolve(&sp, Some("time  lon lat\tdepth line"), None, p).unwrap();
        let line = "2026-06-14T09:30:00Z  -36.1 -47.5\t-12.5  L7";
        f.split(line, Delimiter::Whitespace);
        let v = lay.parse(line, &f).unwrap();
        assert_eq!((v.depth_m, v.line_id), (12.5, "L7"));
    }

    #[test]
    fn row_problems_name_the_field() {
        let p = Path::new("s.csv");
        let lay = SoundingLayout::resolve(
            &spec(Delimiter::Comma),
            Some("time,lon,lat,depth,line"),
            None,
            p,
        )
        .unwrap();
        let mut f = Fields::default();
        for (line, field, frag) in [
            ("2026-06-14T09:30:00Z,-36.1,-47.5,NaN,L", "depth", "finite"),
            (
                "2026-06-14T09:30:00Z,-36.1,-47.5,1e999,L",
                "depth",
                "finite",
            ),
            ("2026-06-14T09:30:00Z,-36.1,-47.5", "depth", "missing"),
            (
                "2026-06-14T09:30:00,-36.1,-47.5,3,L",
                "time",
                "no UTC offset",
            ),
            (
                "2026-06-14T09:30:00Z,abc,-47.5,3,L",
                "lon",
                "expected a coordinate, found 'abc'",
            ),
            (
                "2026-06-14T09:30:00Z,36°06.0'W,-47.5,3,L",
                "lon",
                "write decimal degrees, negative west and south",
            ),
            (
                "2026-06-14T09:30:00Z,-36.1,47.5S,3,L",
                "lat",
                "write decimal degrees, negative west and south",
            ),
        ] {
            f.split(line, Delimiter::Comma);
            let e = lay.parse(line, &f).unwrap_err();
            assert_eq!(e.field, field, "{line}");
            assert!(e.message.contains(frag), "{line}: {}", e.message);
        }
    }

    #[test]
    fn a_no_data_depth_uncertainty_is_refused_and_an_unreadable_row_keeps_its_position() {
        let p = Path::new("s.csv");
        let mut sp = spec(Delimiter::Comma);
        sp.columns.u_depth = Some("u".into());
        let lay = SoundingLayout::resolve(&sp, Some("time,lon,lat,depth,line,u"), None, p).unwrap();
        let mut f = Fields::default();
        let ok = "2026-06-14T09:30:00Z,-36.1,-47.5,12.0,L,1200";
        f.split(ok, Delimiter::Comma);
        assert_eq!(lay.parse(ok, &f).unwrap().u_depth_m, Some(1200.0));
        // A float32 no-data value, and one just above the limit.
        for u in ["3.4028235e38", "1200.5"] {
            let line = format!("2026-06-14T09:30:00Z,-36.1,-47.5,12.0,L,{u}");
            f.split(&line, Delimiter::Comma);
            let e = lay.parse(&line, &f).unwrap_err();
            assert_eq!(e.field, "u");
            assert!(
                e.message.contains("not a plausible standard uncertainty"),
                "{}",
                e.message
            );
            // The row is not parsed, but its position and line can be read for the QA map.
            assert_eq!(lay.position_text(&line, &f), Some((-36.1, -47.5)));
            assert_eq!(lay.line_text(&line, &f), Some("L"));
        }
        let bad = "2026-06-14T09:30:00Z,abc,-47.5,3,L,0.1";
        f.split(bad, Delimiter::Comma);
        assert_eq!(lay.position_text(bad, &f), None);
    }

    #[test]
    fn missing_column_and_wrong_delimiter_are_reported() {
        let p = Path::new("s.csv");
        let e = SoundingLayout::resolve(
            &spec(Delimiter::Comma),
            Some("time,lon,lat,dep,line"),
            None,
            p,
        )
        .unwrap_err();
        assert!(
            e.to_string()
                .starts_with("s.csv:1: field 'depth': no such column"),
            "{e}"
        );
        let e = SoundingLayout::resolve(
            &spec(Delimiter::Comma),
            Some("time;lon;lat;depth;line"),
            None,
            p,
        )
        .unwrap_err();
        assert!(e.to_string().contains("delimiter"), "{e}");
        // A header that differs from the mapping only in case (or a letter) is suggested.
        let e = SoundingLayout::resolve(
            &spec(Delimiter::Comma),
            Some("time,lon,lat,Depht,line"),
            None,
            p,
        )
        .unwrap_err();
        assert_eq!(
            e.to_string(),
            "s.csv:1: field 'depth': no such column for 'depth' in the header: did you mean 'Depht'? (columns: time, lon, lat, Depht, line)"
        );
    }

    #[test]
    fn nul_bytes_name_the_encoding_and_repeated_names_their_positions() {
        // Lossy decodings of "ti" in UTF-16 LE and BE with their byte-order marks, and in UTF-32 LE.
        assert_eq!(nul_encoding("\u{FFFD}\u{FFFD}t\0i\0"), "UTF-16 LE");
        assert_eq!(nul_encoding("\u{FFFD}\u{FFFD}\0t\0i"), "UTF-16 BE");
        assert_eq!(nul_encoding("t\0\0\0i\0\0\0"), "UTF-32");
        assert_eq!(positions_text(&[3, 4]), "4 and 5");
        assert_eq!(positions_text(&[0, 3, 6]), "1, 4 and 7");
        let e = SoundingLayout::resolve(
            &spec(Delimiter::Comma),
            Some("time,lon,lat,depth,line,depth,depth"),
            None,
            Path::new("s.csv"),
        )
        .unwrap_err();
        assert!(e.to_string().contains("columns 4, 6 and 7"), "{e}");
        // By position the mapping is not ambiguous.
        let mut sp = spec(Delimiter::Comma);
        sp.columns.depth = "#6".into();
        assert!(SoundingLayout::resolve(
            &sp,
            Some("time,lon,lat,depth,line,depth"),
            None,
            Path::new("s.csv")
        )
        .is_ok());
    }

    #[test]
    fn times_are_refused_outside_the_plausible_span_only() {
        let mut sp = spec(Delimiter::Comma);
        sp.time_format = TimeFormat::UnixS;
        let lay = SoundingLayout::resolve(
            &sp,
            Some("time,lon,lat,depth,line"),
            None,
            Path::new("s.csv"),
        )
        .unwrap();
        let mut f = Fields::default();
        // The bounds: 1980-01-01T00:00:00Z is 315532800 s, 2100-01-01T00:00:00Z 4102444800 s.
        for (t, ok) in [
            ("315532800", true),
            ("315532799", false),
            ("4102444799", true),
            ("4102444800", false),
        ] {
            let line = format!("{t},10,50,3,L");
            f.split(&line, Delimiter::Comma);
            assert_eq!(lay.parse(&line, &f).is_ok(), ok, "{t}");
        }
        // 315532800000 ms is 1980-01-01: the hint fits; 1e12 s divided by 1000 (1e9) is 2001.
        let line = "1000000000000,10,50,3,L";
        f.split(line, Delimiter::Comma);
        let e = lay.parse(line, &f).unwrap_err();
        assert!(
            e.message
                .ends_with("(divided by 1000 it would be 2001-09-09T01:46:40Z)"),
            "{}",
            e.message
        );
        // 1e20 divided by 1000 is still far beyond 2100: no hint.
        let line = "1e20,10,50,3,L";
        f.split(line, Delimiter::Comma);
        assert!(!lay
            .parse(line, &f)
            .unwrap_err()
            .message
            .contains("milliseconds"));
    }
}
