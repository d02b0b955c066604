//! The failing and the unreduced soundings of a run as GeoJSON (RFC 7946) FeatureCollections,
//! for a reviewer to open in a GIS beside the chart: `failing-soundings.geojson` (reduced
//! soundings whose U95 TVU exceeds the chosen order's limit) and `unreduced-soundings.geojson`
//! (every sounding not reduced, with its status and reason; an unreadable row has a null
//! geometry).
//!
//! Each chunk's worker writes its rows as whole features ([`ExportBuf`], positions carried to
//! longitude/latitude with its thread's PROJ transformation); each soundings file's task
//! writes its chunks' features, in chunk order, into a part ([`ExportParts`]); the parts are
//! joined in file order into the two files ([`join_parts`]), written through an [`AtomicFile`].

use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use super::atomic::{AtomicFile, PARTIAL_SUFFIX};
use super::crs::Transformer;
use super::error::IoError;
use super::numfmt::push_fixed;

/// File name of the failing soundings' export.
pub const FAILING_FILE: &str = "failing-soundings.geojson";
/// File name of the unreduced soundings' export.
pub const UNREDUCED_FILE: &str = "unreduced-soundings.geojson";

/// Decimals of longitude and latitude in the exports (1e-7°, about 1 cm).
const LONLAT_DECIMALS: u32 = 7;

/// Which export a row goes to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ExportKind {
    /// Reduced, outside the chosen order's limit.
    Failing,
    /// Not reduced.
    Unreduced,
}

/// The features of one chunk bound for the exports, as GeoJSON text, each preceded by `,\n`
/// ([`join_parts`] drops the first): the failing ones and the unreduced ones. Made by the
/// worker that reduces the chunk, positions carried to longitude/latitude there (one PROJ
/// transformation per worker thread and CRS, [`with_to_lonlat`]).
#[derive(Debug, Default)]
pub struct ExportBuf {
    /// Failing features.
    pub failing: Vec<u8>,
    /// Unreduced features.
    pub unreduced: Vec<u8>,
    /// The properties of the feature being made.
    props: Vec<u8>,
}

/// Calls `f` with this thread's transformation from `crs` to longitude/latitude (made on first
/// use and kept for the thread's life; `None` when PROJ cannot make it).
pub fn with_to_lonlat<R>(crs: &str, f: impl FnOnce(Option<&Transformer>) -> R) -> R {
    thread_local! {
        static TO_LONLAT: std::cell::RefCell<Vec<(String, Option<Transformer>)>> =
            const { std::cell::RefCell::new(Vec::new()) };
    }
    TO_LONLAT.with(|cache| {
        let mut cache = cache.borrow_mut();
        let k = match cache.iter().position(|(c, _)| c == crs) {
            Some(k) => k,
            None => {
                cache.push((crs.to_string(), Transformer::new(crs, "EPSG:4326").ok()));
                cache.len() - 1
            }
        };
        f(cache[k].1.as_ref())
    })
}

/// Writes a JSON string (quoted, escaped): as it is when it needs no escape, else through
/// serde_json, which escapes as RFC 8259 asks.
pub fn push_json_str(out: &mut Vec<u8>, s: &str) {
    if s.bytes().all(|b| b >= 0x20 && b != b'"' && b != b'\\') {
        out.push(b'"');
        out.extend_from_slice(s.as_bytes());
        out.push(b'"');
    } else {
        // Writing into a Vec cannot fail.
        let _ = serde_json::to_writer(&mut *out, s);
    }
}

/// Writes `,"key":` for a key that needs no escape (the exports' own keys).
fn push_key(out: &mut Vec<u8>, key: &str) {
    debug_assert!(key.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'_'));
    out.extend_from_slice(b",\"");
    out.extend_from_slice(key.as_bytes());
    out.extend_from_slice(b"\":");
}

impl ExportBuf {
    /// Starts a feature's properties: `{"file":…,"row":…,"line":…,"status":…`; add more with
    /// [`ExportBuf::str_prop`] and [`ExportBuf::num_prop`], finish with [`ExportBuf::end`].
    pub fn begin(&mut self, file: &str, row: u64, line: &str, status: &str) {
        self.props.clear();
        self.props.extend_from_slice(b"{\"file\":");
        push_json_str(&mut self.props, file);
        self.props.extend_from_slice(b",\"row\":");
        // Writing into a Vec cannot fail.
        let _ = write!(self.props, "{row}");
        self.props.extend_from_slice(b",\"line\":");
        push_json_str(&mut self.props, line);
        self.props.extend_from_slice(b",\"status\":");
        push_json_str(&mut self.props, status);
    }

    /// Adds a string property (`key`: letters, digits and `_`).
    pub fn str_prop(&mut self, key: &str, v: &str) {
        push_key(&mut self.props, key);
        push_json_str(&mut self.props, v);
    }

    /// Adds a time property, ISO 8601 UTC as the reduced files write it (`key`: letters, digits
    /// and `_`).
    pub fn time_prop(&mut self, key: &str, t_s: f64) {
        push_key(&mut self.props, key);
        self.props.push(b'"');
        super::timefmt::push_utc_bytes(&mut self.props, t_s);
        self.props.push(b'"');
    }

    /// Adds a number property with `decimals` decimals (`key`: letters, digits and `_`).
    pub fn num_prop(&mut self, key: &str, v: f64, decimals: u32) {
        push_key(&mut self.props, key);
        if v.is_finite() {
            push_fixed(&mut self.props, v, decimals);
        } else {
            self.props.extend_from_slice(b"null");
        }
    }

    /// Ends the feature begun last: its position `at` in `crs` (when read) carried to
    /// longitude/latitude, onto the export of `kind`.
    pub fn end(&mut self, kind: ExportKind, at: Option<(f64, f64)>, crs: &str) {
        self.props.push(b'}');
        let lonlat =
            at.and_then(|(x, y)| with_to_lonlat(crs, |t| t.and_then(|t| t.convert(x, y).ok())));
        let out = match kind {
            ExportKind::Failing => &mut self.failing,
            ExportKind::Unreduced => &mut self.unreduced,
        };
        out.extend_from_slice(b",\n{\"type\":\"Feature\",\"geometry\":");
        match lonlat {
            Some((lon, lat)) => {
                out.extend_from_slice(b"{\"type\":\"Point\",\"coordinates\":[");
                push_fixed(out, lon, LONLAT_DECIMALS);
                out.push(b',');
                push_fixed(out, lat, LONLAT_DECIMALS);
                out.extend_from_slice(b"]}");
            }
            None => out.extend_from_slice(b"null"),
        }
        out.extend_from_slice(b",\"properties\":");
        out.extend_from_slice(&self.props);
        out.push(b'}');
    }
}

/// One soundings file's parts of the two exports, as hidden temporaries in the output folder
/// (named so that [`super::atomic::remove_stale_partials`] removes them after a killed run).
pub struct ExportParts {
    files: [(PathBuf, std::io::BufWriter<std::fs::File>); 2],
}

/// The part paths of job `k` in `dir`: failing, unreduced. They carry this process's id, so
/// that two runs into one folder do not write into each other's parts.
pub fn part_paths(dir: &Path, k: usize) -> [PathBuf; 2] {
    let pid = std::process::id();
    [
        dir.join(format!(".{FAILING_FILE}.{pid}.{k}{PARTIAL_SUFFIX}")),
        dir.join(format!(".{UNREDUCED_FILE}.{pid}.{k}{PARTIAL_SUFFIX}")),
    ]
}

impl ExportParts {
    /// Creates job `k`'s parts in `dir`.
    pub fn create(dir: &Path, k: usize) -> Result<ExportParts, IoError> {
        let [a, b] = part_paths(dir, k);
        let open = |p: PathBuf| -> Result<(PathBuf, std::io::BufWriter<std::fs::File>), IoError> {
            let f = std::fs::File::create(&p).map_err(|e| IoError::file(&p, e))?;
            Ok((p, std::io::BufWriter::with_capacity(256 * 1024, f)))
        };
        Ok(ExportParts {
            files: [open(a)?, open(b)?],
        })
    }

    /// Writes a chunk's features.
    pub fn write(&mut self, buf: &ExportBuf) -> Result<(), IoError> {
        for ((p, w), bytes) in self.files.iter_mut().zip([&buf.failing, &buf.unreduced]) {
            w.write_all(bytes).map_err(|e| IoError::file(p, e))?;
        }
        Ok(())
    }

    /// Flushes the parts.
    pub fn finish(self) -> Result<(), IoError> {
        for (p, mut w) in self.files {
            w.flush().map_err(|e| IoError::file(&p, e))?;
        }
        Ok(())
    }
}

/// Joins the parts of jobs `0..n` in `dir` into the two exports (through an [`AtomicFile`]
/// each), removes the parts, and returns the two paths. `name` names the collection.
pub fn join_parts(dir: &Path, n: usize, name: &str) -> Result<[PathBuf; 2], IoError> {
    let mut out = Vec::new();
    for (i, file) in [FAILING_FILE, UNREDUCED_FILE].iter().enumerate() {
        let target = dir.join(file);
        let mut sink = AtomicFile::create(&target, &[])?;
        let mut head = Vec::new();
        head.extend_from_slice(b"{\"type\":\"FeatureCollection\",\"name\":");
        push_json_str(&mut head, name);
        head.extend_from_slice(b",\"features\":[");
        sink.write_all(&head)?;
        let mut first = true;
        let mut buf = vec![0u8; 1 << 16];
        for k in 0..n {
            let part = &part_paths(dir, k)[i];
            let mut f = std::fs::File::open(part).map_err(|e| IoError::file(part, e))?;
            let len = f.metadata().map_err(|e| IoError::file(part, e))?.len();
            if len == 0 {
                continue;
            }
            if first {
                // The first feature has no comma before it.
                f.seek(SeekFrom::Start(1))
                    .map_err(|e| IoError::file(part, e))?;
                first = false;
            }
            loop {
                let got = f.read(&mut buf).map_err(|e| IoError::file(part, e))?;
                if got == 0 {
                    break;
                }
                sink.write_all(&buf[..got])?;
            }
        }
        sink.write_all(b"\n]}\n")?;
        out.push(sink.commit()?);
        for k in 0..n {
            let _ = std::fs::remove_file(&part_paths(dir, k)[i]);
        }
    }
    let mut it = out.into_iter();
    Ok([
        it.next().expect("two exports"),
        it.next().expect("two exports"),
    ])
}

/// Removes the parts of jobs `0..n` (after a failed run).
pub fn remove_parts(dir: &Path, n: usize) {
    for k in 0..n {
        for p in part_paths(dir, k) {
            let _ = std::fs::remove_file(p);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parts_join_into_valid_feature_collections() {
        let d = tempfile::tempdir().unwrap();
        // The first part empty: the first feature written comes from a later part, and has no
        // comma before it.
        for (k, rows) in [0usize, 2, 0, 1].iter().enumerate() {
            let mut parts = ExportParts::create(d.path(), k).unwrap();
            let mut b = ExportBuf::default();
            for r in 0..*rows {
                b.begin("a \"b\".csv", r as u64 + 2, "L1", "reduced");
                b.num_prop("u95_tvu_m", 0.31234, 4);
                b.time_prop("time_utc", 1_781_422_420.75);
                b.end(ExportKind::Failing, Some((-36.5, 12.25)), "EPSG:4326");
            }
            b.begin("a.csv", 9, "L2", "bad_input");
            b.str_prop("status_detail", "field 'depth': expected a number");
            b.end(ExportKind::Unreduced, None, "EPSG:4326");
            parts.write(&b).unwrap();
            parts.finish().unwrap();
        }
        let [f, u] = join_parts(d.path(), 4, "day 1").unwrap();
        let f: serde_json::Value = serde_json::from_slice(&std::fs::read(f).unwrap()).unwrap();
        let feats = f["features"].as_array().unwrap();
        assert_eq!(feats.len(), 3);
        assert_eq!(feats[0]["geometry"]["coordinates"][0], -36.5);
        assert_eq!(feats[0]["properties"]["file"], "a \"b\".csv");
        let mut v = Vec::new();
        push_json_str(&mut v, "L\u{1}\\x");
        assert_eq!(v, br#""L\u0001\\x""#);
        v.clear();
        push_json_str(&mut v, "plain é");
        assert_eq!(v, "\"plain é\"".as_bytes());
        assert_eq!(feats[2]["properties"]["u95_tvu_m"], 0.3123);
        assert_eq!(
            feats[0]["properties"]["time_utc"],
            "2026-06-14T07:33:40.750Z"
        );
        let u: serde_json::Value = serde_json::from_slice(&std::fs::read(u).unwrap()).unwrap();
        let feats = u["features"].as_array().unwrap();
        assert_eq!(feats.len(), 4);
        assert!(feats[1]["geometry"].is_null());
        // The parts are gone.
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 2);
    }
}
