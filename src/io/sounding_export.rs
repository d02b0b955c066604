//! The failing and the unreduced soundings of a run as GeoJSON (RFC 7946) FeatureCollections,
//! for a reviewer to open in a GIS beside the chart: `failing-soundings.geojson` (reduced
//! soundings whose U95 TVU exceeds the chosen order's limit) and `unreduced-soundings.geojson`
//! (every sounding not reduced, with its status and reason; an unreadable row has a null
//! geometry).
//!
//! Rows are gathered per chunk ([`ExportBuf`]: properties as JSON text, position in the
//! soundings' CRS), carried to longitude/latitude and written per soundings file into a part
//! ([`ExportParts`]), and the parts joined in file order into the two files ([`join_parts`]),
//! written through an [`AtomicFile`].

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

/// Decimals of longitude and latitude in the exports (1e-8°, about 1 mm).
const LONLAT_DECIMALS: u32 = 8;

/// Which export a row goes to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ExportKind {
    /// Reduced, outside the chosen order's limit.
    Failing,
    /// Not reduced.
    Unreduced,
}

/// One row bound for an export: its kind, its position in the soundings' CRS (when read) and
/// where its properties' text starts and ends in [`ExportBuf::props`].
pub type ExportRow = (ExportKind, Option<(f64, f64)>, usize, usize);

/// Rows of one chunk bound for the exports, with their properties as JSON objects' text.
#[derive(Debug, Default)]
pub struct ExportBuf {
    /// The properties' text.
    pub props: Vec<u8>,
    /// The rows.
    pub rows: Vec<ExportRow>,
}

/// Writes a JSON string (quoted, escaped).
pub fn push_json_str(out: &mut Vec<u8>, s: &str) {
    // serde_json escapes as RFC 8259 asks; writing into a Vec cannot fail.
    let _ = serde_json::to_writer(&mut *out, s);
}

impl ExportBuf {
    /// Starts a row's properties: `{"file":…,"row":…,"line":…,"status":…`; finish with
    /// [`ExportBuf::end`].
    pub fn begin(&mut self, file: &str, row: u64, line: &str, status: &str) -> usize {
        let start = self.props.len();
        self.props.extend_from_slice(b"{\"file\":");
        push_json_str(&mut self.props, file);
        self.props.extend_from_slice(b",\"row\":");
        self.props.extend_from_slice(row.to_string().as_bytes());
        self.props.extend_from_slice(b",\"line\":");
        push_json_str(&mut self.props, line);
        self.props.extend_from_slice(b",\"status\":");
        push_json_str(&mut self.props, status);
        start
    }

    /// Adds a string property.
    pub fn str_prop(&mut self, key: &str, v: &str) {
        self.props.push(b',');
        push_json_str(&mut self.props, key);
        self.props.push(b':');
        push_json_str(&mut self.props, v);
    }

    /// Adds a number property with `decimals` decimals.
    pub fn num_prop(&mut self, key: &str, v: f64, decimals: u32) {
        self.props.push(b',');
        push_json_str(&mut self.props, key);
        self.props.push(b':');
        if v.is_finite() {
            push_fixed(&mut self.props, v, decimals);
        } else {
            self.props.extend_from_slice(b"null");
        }
    }

    /// Ends the row begun at `start`.
    pub fn end(&mut self, kind: ExportKind, at: Option<(f64, f64)>, start: usize) {
        self.props.push(b'}');
        self.rows.push((kind, at, start, self.props.len()));
    }
}

/// One soundings file's parts of the two exports, as hidden temporaries in the output folder
/// (named so that [`super::atomic::remove_stale_partials`] removes them after a killed run).
pub struct ExportParts {
    files: [(PathBuf, std::io::BufWriter<std::fs::File>); 2],
    to_lonlat: Transformer,
    text: Vec<u8>,
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
    /// Creates job `k`'s parts in `dir`, for soundings in `crs`.
    pub fn create(dir: &Path, k: usize, crs: &str) -> Result<ExportParts, IoError> {
        let to_lonlat = Transformer::new(crs, "EPSG:4326")
            .map_err(|e| IoError::content(super::error::Position::file(dir), e.to_string()))?;
        let [a, b] = part_paths(dir, k);
        let open = |p: PathBuf| -> Result<(PathBuf, std::io::BufWriter<std::fs::File>), IoError> {
            let f = std::fs::File::create(&p).map_err(|e| IoError::file(&p, e))?;
            Ok((p, std::io::BufWriter::new(f)))
        };
        Ok(ExportParts {
            files: [open(a)?, open(b)?],
            to_lonlat,
            text: Vec::new(),
        })
    }

    /// Writes a chunk's rows: each feature preceded by `,\n` ([`join_parts`] drops the first).
    pub fn write(&mut self, buf: &ExportBuf) -> Result<(), IoError> {
        for &(kind, at, a, b) in &buf.rows {
            self.text.clear();
            self.text
                .extend_from_slice(b",\n{\"type\":\"Feature\",\"geometry\":");
            match at.and_then(|(x, y)| self.to_lonlat.convert(x, y).ok()) {
                Some((lon, lat)) => {
                    self.text
                        .extend_from_slice(b"{\"type\":\"Point\",\"coordinates\":[");
                    push_fixed(&mut self.text, lon, LONLAT_DECIMALS);
                    self.text.push(b',');
                    push_fixed(&mut self.text, lat, LONLAT_DECIMALS);
                    self.text.extend_from_slice(b"]}");
                }
                None => self.text.extend_from_slice(b"null"),
            }
            self.text.extend_from_slice(b",\"properties\":");
            self.text.extend_from_slice(&buf.props[a..b]);
            self.text.push(b'}');
            let (p, w) = &mut self.files[usize::from(kind == ExportKind::Unreduced)];
            w.write_all(&self.text).map_err(|e| IoError::file(p, e))?;
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
            let mut parts = ExportParts::create(d.path(), k, "EPSG:4326").unwrap();
            let mut b = ExportBuf::default();
            for r in 0..*rows {
                let s = b.begin("a \"b\".csv", r as u64 + 2, "L1", "reduced");
                b.num_prop("u95_tvu_m", 0.31234, 4);
                b.end(ExportKind::Failing, Some((-36.5, 12.25)), s);
            }
            let s = b.begin("a.csv", 9, "L2", "bad_input");
            b.str_prop("status_detail", "field 'depth': expected a number");
            b.end(ExportKind::Unreduced, None, s);
            parts.write(&b).unwrap();
            parts.finish().unwrap();
        }
        let [f, u] = join_parts(d.path(), 4, "day 1").unwrap();
        let f: serde_json::Value = serde_json::from_slice(&std::fs::read(f).unwrap()).unwrap();
        let feats = f["features"].as_array().unwrap();
        assert_eq!(feats.len(), 3);
        assert_eq!(feats[0]["geometry"]["coordinates"][0], -36.5);
        assert_eq!(feats[0]["properties"]["file"], "a \"b\".csv");
        assert_eq!(feats[2]["properties"]["u95_tvu_m"], 0.3123);
        let u: serde_json::Value = serde_json::from_slice(&std::fs::read(u).unwrap()).unwrap();
        let feats = u["features"].as_array().unwrap();
        assert_eq!(feats.len(), 4);
        assert!(feats[1]["geometry"].is_null());
        // The parts are gone.
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 2);
    }
}
