//! Parquet files of the soundings tables: written through an [`AtomicFile`] (a temporary name,
//! renamed when complete), with the run's provenance in the file's key-value metadata.
//!
//! The columns of each row group are encoded in parallel (one task per column on the rayon
//! pool), so that the encoding keeps up with the workers that reduce the rows. Row groups are
//! kept to [`ROW_GROUP_ROWS`] rows, so the writer's buffered row group, the only data it holds,
//! stays a few MiB whatever the file's size. Pages are Snappy-compressed; the text columns (the
//! status, the zone, the line, the detail) are dictionary-encoded, the floats and times not
//! (they hardly repeat, and hashing every value costs more than it saves).

use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow_array::RecordBatch;
use arrow_schema::{DataType, SchemaRef};
use parquet::arrow::arrow_writer::{compute_leaves, ArrowColumnWriter, ArrowRowGroupWriterFactory};
use parquet::arrow::{add_encoded_arrow_schema_to_metadata, ArrowSchemaConverter};
use parquet::basic::Compression;
use parquet::file::metadata::KeyValue;
use parquet::file::properties::{EnabledStatistics, WriterProperties};
use parquet::file::writer::SerializedFileWriter;
use parquet::schema::types::ColumnPath;
use rayon::prelude::*;

use super::atomic::AtomicFile;
use super::error::IoError;

/// Rows per row group of the files ebbwise writes (a few MiB of encoded columns held at once).
pub const ROW_GROUP_ROWS: usize = 32 * 1024;

/// The key of the provenance in a file's key-value metadata (a JSON object).
pub const PROVENANCE_KEY: &str = "ebbwise.provenance";

/// A Parquet file being written.
pub struct ParquetOut {
    target: PathBuf,
    schema: SchemaRef,
    writer: SerializedFileWriter<AtomicFile>,
    factory: ArrowRowGroupWriterFactory,
    /// The row group being encoded: a writer per column, and its rows so far.
    group: Option<(Vec<ArrowColumnWriter>, usize)>,
    groups_written: usize,
}

/// The threads that encode columns: a pool of their own, not the global one, whose workers
/// may be waiting on this very writer (a file's reduction runs on a global worker and blocks
/// when its writer falls behind). As many threads as cores; they only run while the workers
/// wait.
fn encoding_pool() -> &'static rayon::ThreadPool {
    static POOL: std::sync::OnceLock<rayon::ThreadPool> = std::sync::OnceLock::new();
    POOL.get_or_init(|| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(
                std::thread::available_parallelism()
                    .map(|n| n.get())
                    .unwrap_or(2),
            )
            .thread_name(|i| format!("ebbwise-parquet-{i}"))
            .build()
            .expect("a thread pool can be built")
    })
}

fn parquet_error(path: &Path, e: impl std::fmt::Display) -> IoError {
    IoError::file(path, std::io::Error::other(format!("Parquet: {e}")))
}

/// The writer properties of every file ebbwise writes with columns `schema`.
fn properties(schema: &arrow_schema::Schema) -> WriterProperties {
    let mut props = WriterProperties::builder().set_dictionary_enabled(false);
    for f in schema.fields() {
        if matches!(
            f.data_type(),
            DataType::Utf8 | DataType::LargeUtf8 | DataType::Dictionary(..)
        ) {
            props = props.set_column_dictionary_enabled(ColumnPath::from(f.name().as_str()), true);
        }
    }
    let mut props = props
        .set_statistics_enabled(EnabledStatistics::Chunk)
        .set_compression(Compression::SNAPPY)
        .set_max_row_group_row_count(Some(ROW_GROUP_ROWS))
        .set_created_by(format!("ebbwise {}", env!("CARGO_PKG_VERSION")))
        .build();
    // The Arrow schema in the metadata, so that a reader gets back the types (UTC timestamps,
    // dictionaries) and every field's unit and meaning.
    add_encoded_arrow_schema_to_metadata(schema, &mut props);
    props
}

impl ParquetOut {
    /// Starts `target` (under its temporary name) with columns `schema`. Refuses to write over
    /// any of `inputs`.
    pub fn create(target: &Path, inputs: &[&Path], schema: SchemaRef) -> Result<Self, IoError> {
        let sink = AtomicFile::create(target, inputs)?;
        let props = Arc::new(properties(&schema));
        let parquet_schema = ArrowSchemaConverter::new()
            .with_coerce_types(props.coerce_types())
            .convert(&schema)
            .map_err(|e| parquet_error(target, e))?;
        let writer = SerializedFileWriter::new(sink, parquet_schema.root_schema_ptr(), props)
            .map_err(|e| parquet_error(target, e))?;
        let factory = ArrowRowGroupWriterFactory::new(&writer, Arc::clone(&schema));
        Ok(ParquetOut {
            target: target.to_path_buf(),
            schema,
            writer,
            factory,
            group: None,
            groups_written: 0,
        })
    }

    /// Appends a batch of rows (of the file's schema), encoding its columns in parallel.
    pub fn write(&mut self, batch: &RecordBatch) -> Result<(), IoError> {
        let target = &self.target;
        let (writers, rows) = match &mut self.group {
            Some(g) => g,
            None => {
                let w = self
                    .factory
                    .create_column_writers(self.groups_written)
                    .map_err(|e| parquet_error(target, e))?;
                self.group.insert((w, 0))
            }
        };
        let mut leaves = Vec::with_capacity(writers.len());
        for (field, array) in self.schema.fields().iter().zip(batch.columns()) {
            leaves.extend(compute_leaves(field, array).map_err(|e| parquet_error(target, e))?);
        }
        encoding_pool()
            .install(|| {
                writers
                    .par_iter_mut()
                    .zip(leaves.par_iter())
                    .try_for_each(|(w, leaf)| w.write(leaf))
            })
            .map_err(|e| parquet_error(target, e))?;
        *rows += batch.num_rows();
        if *rows >= ROW_GROUP_ROWS {
            self.close_group()?;
        }
        Ok(())
    }

    /// Closes the row group being encoded and appends it to the file.
    fn close_group(&mut self) -> Result<(), IoError> {
        let Some((writers, _)) = self.group.take() else {
            return Ok(());
        };
        let target = &self.target;
        let chunks = encoding_pool()
            .install(|| {
                writers
                    .into_par_iter()
                    .map(|w| w.close())
                    .collect::<Result<Vec<_>, _>>()
            })
            .map_err(|e| parquet_error(target, e))?;
        let mut rg = self
            .writer
            .next_row_group()
            .map_err(|e| parquet_error(target, e))?;
        for c in chunks {
            c.append_to_row_group(&mut rg)
                .map_err(|e| parquet_error(target, e))?;
        }
        rg.close().map_err(|e| parquet_error(target, e))?;
        self.groups_written += 1;
        Ok(())
    }

    /// Writes the last row group and the footer with `metadata` (key, value) pairs, and
    /// renames the file onto its target.
    pub fn commit(mut self, metadata: &[(String, String)]) -> Result<PathBuf, IoError> {
        self.close_group()?;
        for (k, v) in metadata {
            self.writer
                .append_key_value_metadata(KeyValue::new(k.clone(), v.clone()));
        }
        let sink = self
            .writer
            .into_inner()
            .map_err(|e| parquet_error(&self.target, e))?;
        sink.commit()
    }
}

/// Rows per record batch read from a Parquet soundings file (one worker's share).
pub const READ_BATCH_ROWS: usize = 4 * 1024;

/// Whether `path` names a Parquet file: by its extension (`.parquet`, `.parq`, `.pq`).
pub fn is_parquet(path: &Path) -> bool {
    path.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| matches!(e.to_ascii_lowercase().as_str(), "parquet" | "parq" | "pq"))
}

/// A GeoParquet file's primary geometry column (WKB points) and its CRS.
#[derive(Debug, Clone)]
pub struct GeoColumn {
    /// Column index in the schema.
    pub index: usize,
    /// Column name.
    pub name: String,
    /// The CRS as `AUTHORITY:CODE` when the metadata says it (`OGC:CRS84` when it says none,
    /// GeoParquet's default); `None` when it is given in a form without an id.
    pub crs: Option<String>,
}

/// A Parquet soundings file, read in record batches.
pub struct ParquetSoundings {
    path: PathBuf,
    reader: parquet::arrow::arrow_reader::ParquetRecordBatchReader,
    schema: SchemaRef,
    geometry: Option<GeoColumn>,
    rows: usize,
}

impl ParquetSoundings {
    /// Opens `path`; batches of `batch_rows` rows.
    pub fn open(path: &Path, batch_rows: usize) -> Result<Self, IoError> {
        use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
        let file = std::fs::File::open(path).map_err(|e| IoError::file(path, e))?;
        let builder = ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| {
            IoError::content(
                super::error::Position::file(path),
                format!("not a readable Parquet file: {e}"),
            )
        })?;
        let schema = Arc::clone(builder.schema());
        let rows = builder.metadata().file_metadata().num_rows().max(0) as usize;
        let geo = builder
            .metadata()
            .file_metadata()
            .key_value_metadata()
            .and_then(|kv| kv.iter().find(|k| k.key == "geo"))
            .and_then(|k| k.value.clone());
        let geometry = match geo {
            Some(text) => Some(geo_column(path, &schema, &text)?),
            None => None,
        };
        let reader = builder
            .with_batch_size(batch_rows)
            .build()
            .map_err(|e| parquet_error(path, e))?;
        Ok(ParquetSoundings {
            path: path.to_path_buf(),
            reader,
            schema,
            geometry,
            rows,
        })
    }

    /// The file's columns.
    pub fn schema(&self) -> &SchemaRef {
        &self.schema
    }

    /// The column names, in order.
    pub fn names(&self) -> Vec<String> {
        self.schema
            .fields()
            .iter()
            .map(|f| f.name().clone())
            .collect()
    }

    /// The GeoParquet geometry column, when the file has one.
    pub fn geometry(&self) -> Option<&GeoColumn> {
        self.geometry.as_ref()
    }

    /// Rows in the file (from its footer).
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// The next batch of rows, `None` at the end.
    pub fn next_batch(&mut self) -> Result<Option<RecordBatch>, IoError> {
        match self.reader.next() {
            None => Ok(None),
            Some(Ok(b)) => Ok(Some(b)),
            Some(Err(e)) => Err(parquet_error(&self.path, e)),
        }
    }
}

/// The primary geometry column of GeoParquet metadata `text` (a JSON object with
/// `primary_column` and `columns.<name>.encoding` / `.crs`).
fn geo_column(path: &Path, schema: &SchemaRef, text: &str) -> Result<GeoColumn, IoError> {
    let bad = |m: String| IoError::content(super::error::Position::file(path).field("geo"), m);
    let v: serde_json::Value = serde_json::from_str(text)
        .map_err(|e| bad(format!("the GeoParquet metadata is not JSON: {e}")))?;
    let name = v
        .get("primary_column")
        .and_then(|p| p.as_str())
        .ok_or_else(|| bad("the GeoParquet metadata names no primary_column".into()))?
        .to_string();
    let col = v.get("columns").and_then(|c| c.get(&name));
    let encoding = col
        .and_then(|c| c.get("encoding"))
        .and_then(|e| e.as_str())
        .unwrap_or("WKB");
    if !encoding.eq_ignore_ascii_case("wkb") {
        return Err(bad(format!(
            "geometry column '{name}' is encoded as {encoding}; ebbwise reads WKB points"
        )));
    }
    let index = schema.index_of(&name).map_err(|_| {
        bad(format!(
            "the primary geometry column '{name}' is not in the file"
        ))
    })?;
    let crs = match col.and_then(|c| c.get("crs")) {
        // GeoParquet: a missing crs means OGC:CRS84 (longitude, latitude on WGS 84).
        None => Some("OGC:CRS84".to_string()),
        Some(serde_json::Value::Null) => None,
        Some(c) => c.get("id").and_then(|id| {
            let auth = id.get("authority")?.as_str()?;
            let code = match id.get("code")? {
                serde_json::Value::String(s) => s.clone(),
                n => n.to_string(),
            };
            Some(format!("{auth}:{code}"))
        }),
    };
    Ok(GeoColumn { index, name, crs })
}

/// The x and y of a WKB point (2D, or with Z / M, either byte order; ISO and extended WKB),
/// `None` for any other geometry or a malformed value.
pub fn wkb_point(b: &[u8]) -> Option<(f64, f64)> {
    let little = match b.first()? {
        0 => false,
        1 => true,
        _ => return None,
    };
    let u32_at = |i: usize| -> Option<u32> {
        let a: [u8; 4] = b.get(i..i + 4)?.try_into().ok()?;
        Some(if little {
            u32::from_le_bytes(a)
        } else {
            u32::from_be_bytes(a)
        })
    };
    let f64_at = |i: usize| -> Option<f64> {
        let a: [u8; 8] = b.get(i..i + 8)?.try_into().ok()?;
        Some(if little {
            f64::from_le_bytes(a)
        } else {
            f64::from_be_bytes(a)
        })
    };
    let ty = u32_at(1)?;
    // Extended WKB flags a SRID (0x20000000) followed by 4 bytes, and Z/M in high bits; ISO
    // WKB says Z/M by adding 1000/2000/3000.
    let has_srid = ty & 0x2000_0000 != 0;
    let base = (ty & 0x0FFF_FFFF) % 1000;
    if base != 1 {
        return None;
    }
    let at = if has_srid { 9 } else { 5 };
    Some((f64_at(at)?, f64_at(at + 8)?))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wkb_points_are_read_in_both_byte_orders_with_z_and_srid() {
        // POINT (1.5 -2.25) little endian (OGC Simple Features, ISO 19125-1 §8.2).
        let mut le = vec![1u8];
        le.extend(1u32.to_le_bytes());
        le.extend(1.5f64.to_le_bytes());
        le.extend((-2.25f64).to_le_bytes());
        assert_eq!(wkb_point(&le), Some((1.5, -2.25)));
        let mut be = vec![0u8];
        be.extend(1001u32.to_be_bytes());
        be.extend(3.0f64.to_be_bytes());
        be.extend(4.0f64.to_be_bytes());
        be.extend(5.0f64.to_be_bytes());
        assert_eq!(wkb_point(&be), Some((3.0, 4.0)));
        let mut ewkb = vec![1u8];
        ewkb.extend((0x2000_0001u32).to_le_bytes());
        ewkb.extend(4326u32.to_le_bytes());
        ewkb.extend(7.0f64.to_le_bytes());
        ewkb.extend(8.0f64.to_le_bytes());
        assert_eq!(wkb_point(&ewkb), Some((7.0, 8.0)));
        // A linestring is not a point; a short value is malformed.
        let mut ls = vec![1u8];
        ls.extend(2u32.to_le_bytes());
        assert_eq!(wkb_point(&ls), None);
        assert_eq!(wkb_point(&le[..12]), None);
    }
}
