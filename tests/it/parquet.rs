//! Parquet in and out: a Parquet output holds every value of the CSV output at its written
//! precision, with typed columns; a Parquet soundings file (plain or GeoParquet) reduces as its
//! CSV original does; nulls and wrong column types are named, never dropped.
//!
//! The files are read back with the `parquet` crate's reader (Apache Parquet format, Arrow
//! schema in the footer), not with anything of ebbwise's; the WKB points of the GeoParquet file
//! are written by hand after ISO 19125-1 (OGC Simple Features) §8.2, and its `geo` metadata after
//! the GeoParquet 1.1 specification (from memory: `version`, `primary_column`, `columns.<name>`
//! with `encoding` "WKB", `geometry_types` and a PROJJSON `crs` with an `id`).

use std::collections::BTreeMap;
use std::path::Path;
use std::sync::Arc;

use arrow_array::cast::AsArray;
use arrow_array::types::{Int8Type, TimestampMicrosecondType, UInt32Type};
use arrow_array::{Array, ArrayRef, RecordBatch};
use arrow_schema::{DataType, Field, Schema, TimeUnit};

use super::{demo_project_with_absolute_paths, ebbwise, read_csv, repo, stderr};

/// Reads a whole Parquet file: its batches concatenated column by column (as arrays per
/// batch), the schema, and the footer's key-value metadata.
fn read_parquet(path: &Path) -> (Arc<Schema>, Vec<RecordBatch>, BTreeMap<String, String>) {
    let f = std::fs::File::open(path).unwrap();
    let b = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(f).unwrap();
    let kv: BTreeMap<String, String> = b
        .metadata()
        .file_metadata()
        .key_value_metadata()
        .map(|kv| {
            kv.iter()
                .map(|k| (k.key.clone(), k.value.clone().unwrap_or_default()))
                .collect()
        })
        .unwrap_or_default();
    let schema = Arc::clone(b.schema());
    let batches: Vec<RecordBatch> = b.build().unwrap().map(|r| r.unwrap()).collect();
    (schema, batches, kv)
}

/// Column `name` of every batch, row by row, as the CSV would write it (4 decimals for the
/// floats the reduction writes; times to the microsecond as UTC seconds; "" for a null).
fn column_text(batches: &[RecordBatch], name: &str) -> Vec<String> {
    let mut out = Vec::new();
    for b in batches {
        let a = b
            .column_by_name(name)
            .unwrap_or_else(|| panic!("no column {name}"));
        for r in 0..a.len() {
            out.push(if a.is_null(r) {
                String::new()
            } else {
                value_text(a, r)
            });
        }
    }
    out
}

fn value_text(a: &ArrayRef, r: usize) -> String {
    match a.data_type() {
        DataType::Float64 => format!(
            "{:.4}",
            a.as_primitive::<arrow_array::types::Float64Type>().value(r)
        ),
        DataType::Boolean => if a.as_boolean().value(r) { "yes" } else { "no" }.to_string(),
        DataType::Utf8 => a.as_string::<i32>().value(r).to_string(),
        DataType::Timestamp(TimeUnit::Microsecond, Some(tz)) => {
            assert_eq!(tz.as_ref(), "UTC");
            a.as_primitive::<TimestampMicrosecondType>()
                .value(r)
                .to_string()
        }
        DataType::Dictionary(k, _) if **k == DataType::Int8 => {
            let d = a.as_dictionary::<Int8Type>();
            let v = d.values().as_string::<i32>();
            v.value(d.keys().value(r) as usize).to_string()
        }
        DataType::Dictionary(k, _) if **k == DataType::UInt32 => {
            let d = a.as_dictionary::<UInt32Type>();
            let v = d.values().as_string::<i32>();
            v.value(d.keys().value(r) as usize).to_string()
        }
        other => panic!("unexpected type {other}"),
    }
}

/// An RFC 3339 text (or Unix seconds) as whole microseconds since 1970 (chrono, not ebbwise's
/// parser).
fn micros(text: &str) -> String {
    if let Ok(s) = text.parse::<f64>() {
        return ((s * 1e6).round() as i64).to_string();
    }
    chrono::DateTime::parse_from_rfc3339(text)
        .unwrap_or_else(|e| panic!("{text}: {e}"))
        .timestamp_micros()
        .to_string()
}

fn reduce(project: &Path, out: &Path, format: &str) {
    let o = ebbwise(&[
        "reduce",
        project.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--no-progress",
        "--format",
        format,
    ]);
    // The demo's planted faults leave some soundings unreduced: exit 1.
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
}

/// Columns whose CSV text is the Parquet value at 4 decimals.
const FOUR_DECIMALS: [&str; 12] = [
    "tide_m",
    "reduced_depth_m",
    "u_tide_gauge_m",
    "u_tide_datum_m",
    "u_tide_range_m",
    "u_tide_timing_m",
    "u_tide_zone_m",
    "u_tide_m",
    "u_sounding_m",
    "u_tvu_m",
    "u95_tvu_m",
    "allowed_u95_tvu_m",
];

#[test]
fn a_parquet_output_holds_every_value_of_the_csv_output_at_its_written_precision() {
    let csv_out = tempfile::tempdir().unwrap();
    let pq_out = tempfile::tempdir().unwrap();
    let project = repo().join("zoning-demo/project.toml");
    reduce(&project, csv_out.path(), "csv");
    reduce(&project, pq_out.path(), "parquet");
    for stem in ["launch-a", "launch-b"] {
        let (header, rows) = read_csv(&csv_out.path().join(format!("{stem}.reduced.csv")));
        let pq = pq_out.path().join(format!("{stem}.reduced.parquet"));
        assert!(
            !pq_out.path().join(format!("{stem}.reduced.csv")).exists(),
            "a Parquet run writes no CSV"
        );
        let (schema, batches, kv) = read_parquet(&pq);
        let names: Vec<&str> = schema.fields().iter().map(|f| f.name().as_str()).collect();
        assert_eq!(names, header, "{stem}: the same columns in the same order");
        let n: usize = batches.iter().map(|b| b.num_rows()).sum();
        assert_eq!(n, rows.len(), "{stem}: one row per CSV row");
        for (j, name) in header.iter().enumerate() {
            let csv_col: Vec<&str> = rows.iter().map(|r| r[j].as_str()).collect();
            let pq_col = column_text(&batches, name);
            let field = schema.field(j);
            for (r, (c, p)) in csv_col.iter().zip(&pq_col).enumerate() {
                let want = match (field.data_type(), name.as_str()) {
                    // The input's time: the instant the CSV text names.
                    (DataType::Timestamp(..), _) => micros(c),
                    // The input's numbers: the value the CSV text reads as.
                    (DataType::Float64, n) if !FOUR_DECIMALS.contains(&n) => {
                        let col = batches.iter().flat_map(|b| {
                            let a = b
                                .column(j)
                                .as_primitive::<arrow_array::types::Float64Type>()
                                .clone();
                            (0..a.len()).map(move |i| (!a.is_null(i)).then(|| a.value(i)))
                        });
                        let got = col.clone().nth(r).unwrap();
                        // A field that is not a finite number (the demo's NaN depth) is null.
                        let v = c.parse::<f64>().ok().filter(|v| v.is_finite());
                        assert_eq!(got, v, "{stem} row {} column {name}", r + 2);
                        continue;
                    }
                    _ => c.to_string(),
                };
                assert_eq!(p, &want, "{stem} row {} column {name}", r + 2);
            }
        }
        // Typed as docs/outputs.md says, with units in the field metadata.
        let ty = |n: &str| schema.field_with_name(n).unwrap().data_type().clone();
        let time_col = if stem == "launch-a" { "time" } else { "unix_s" };
        assert_eq!(
            ty(time_col),
            DataType::Timestamp(TimeUnit::Microsecond, Some("UTC".into()))
        );
        assert_eq!(
            ty("status"),
            DataType::Dictionary(Box::new(DataType::Int8), Box::new(DataType::Utf8))
        );
        assert_eq!(ty("within_order"), DataType::Boolean);
        assert_eq!(ty("u95_tvu_m"), DataType::Float64);
        let unit = |n: &str| {
            schema
                .field_with_name(n)
                .unwrap()
                .metadata()
                .get("unit")
                .cloned()
        };
        assert_eq!(unit("reduced_depth_m").as_deref(), Some("m"));
        assert_eq!(unit("u95_tvu_m").as_deref(), Some("m"));
        // The provenance: every input with the SHA-256 of its bytes.
        let prov: serde_json::Value = serde_json::from_str(&kv["ebbwise.provenance"]).unwrap();
        let inputs = prov["inputs"].as_array().unwrap();
        let snd = inputs.iter().find(|i| i["role"] == "soundings").unwrap();
        let path = repo().join(snd["path"].as_str().unwrap());
        let path = if path.exists() {
            path
        } else {
            Path::new(snd["path"].as_str().unwrap()).to_path_buf()
        };
        use sha2::Digest;
        let sha = format!("{:x}", sha2::Sha256::digest(std::fs::read(&path).unwrap()));
        assert_eq!(snd["sha256"], sha.as_str());
        assert!(inputs.iter().any(|i| i["role"] == "project"));
        assert_eq!(prov["order"], "special");
        assert!(prov["caution"]
            .as_str()
            .unwrap()
            .contains("qualified hydrographic review"));
    }
    // No temporary file is left behind.
    for e in std::fs::read_dir(pq_out.path()).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().into_owned();
        assert!(!name.ends_with(".ebbwise-partial"), "{name}");
    }
}

/// Writes `csv` (the demo's launch-a layout: time, easting, northing, depth_m, line) as a
/// Parquet file, times as UTC timestamps; with `geo`, easting and northing as a GeoParquet
/// WKB point column `geometry` in `crs_code` instead.
fn launch_a_as_parquet(csv: &Path, out: &Path, geo: Option<u32>, nulls_at: &[usize]) {
    let (header, rows) = read_csv(csv);
    assert_eq!(header, ["time", "easting", "northing", "depth_m", "line"]);
    let t: arrow_array::TimestampMicrosecondArray = rows
        .iter()
        .map(|r| Some(micros(&r[0]).parse::<i64>().unwrap()))
        .collect::<arrow_array::TimestampMicrosecondArray>()
        .with_timezone("UTC");
    let num = |j: usize| -> ArrayRef {
        Arc::new(
            rows.iter()
                .enumerate()
                .map(|(i, r)| {
                    if j == 3 && nulls_at.contains(&i) {
                        None
                    } else {
                        r[j].parse::<f64>().ok()
                    }
                })
                .collect::<arrow_array::Float64Array>(),
        )
    };
    let line: ArrayRef = Arc::new(
        rows.iter()
            .map(|r| Some(r[4].as_str()))
            .collect::<arrow_array::StringArray>(),
    );
    let mut fields = vec![Field::new("time", t.data_type().clone(), true)];
    let mut cols: Vec<ArrayRef> = vec![Arc::new(t)];
    let mut kv = Vec::new();
    match geo {
        None => {
            fields.push(Field::new("easting", DataType::Float64, true));
            fields.push(Field::new("northing", DataType::Float64, true));
            cols.push(num(1));
            cols.push(num(2));
        }
        Some(code) => {
            let wkb: arrow_array::BinaryArray = rows
                .iter()
                .map(|r| {
                    let mut b = vec![1u8];
                    b.extend(1u32.to_le_bytes());
                    b.extend(r[1].parse::<f64>().unwrap().to_le_bytes());
                    b.extend(r[2].parse::<f64>().unwrap().to_le_bytes());
                    Some(b)
                })
                .collect::<Vec<_>>()
                .iter()
                .map(|b| b.as_deref())
                .collect();
            fields.push(Field::new("geometry", DataType::Binary, true));
            cols.push(Arc::new(wkb));
            kv.push(parquet::file::metadata::KeyValue::new(
                "geo".to_string(),
                format!(
                    r#"{{"version":"1.1.0","primary_column":"geometry","columns":{{"geometry":{{"encoding":"WKB","geometry_types":["Point"],"crs":{{"type":"ProjectedCRS","name":"WGS 84 / UTM zone 24S","id":{{"authority":"EPSG","code":{code}}}}}}}}}}}"#
                ),
            ));
        }
    }
    fields.push(Field::new("depth_m", DataType::Float64, true));
    cols.push(num(3));
    fields.push(Field::new("line", DataType::Utf8, true));
    cols.push(line);
    let schema = Arc::new(Schema::new(fields));
    let batch = RecordBatch::try_new(Arc::clone(&schema), cols).unwrap();
    let props = parquet::file::properties::WriterProperties::builder()
        .set_key_value_metadata(Some(kv))
        .set_max_row_group_row_count(Some(10_000))
        .build();
    let f = std::fs::File::create(out).unwrap();
    let mut w = parquet::arrow::ArrowWriter::try_new(f, schema, Some(props)).unwrap();
    w.write(&batch).unwrap();
    w.close().unwrap();
}

/// The demo project with launch-a read from `parquet` instead of its CSV.
fn project_reading(dir: &Path, parquet: &Path) -> std::path::PathBuf {
    let demo = repo().join("zoning-demo");
    let text = demo_project_with_absolute_paths()
        .replace(
            &format!("\"{}/soundings/launch-a.csv\"", demo.display()),
            &format!("\"{}\"", parquet.display()),
        )
        .replace(
            "constants = \"tide-model/",
            &format!("constants = \"{}/tide-model/", demo.display()),
        );
    assert!(text.contains(parquet.to_str().unwrap()));
    let p = dir.join("project.toml");
    std::fs::write(&p, text).unwrap();
    p
}

/// `ebbwise reduce` on `project`, which must stop before reducing (exit 2): its stderr.
fn refused(project: &Path, out: &Path) -> String {
    let o = ebbwise(&[
        "reduce",
        project.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--no-progress",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    stderr(&o)
}

/// The appended columns (zone onwards) of a reduced CSV, row by row.
fn appended(path: &Path) -> Vec<Vec<String>> {
    let (header, rows) = read_csv(path);
    let from = header.iter().position(|h| h == "zone").unwrap();
    rows.into_iter().map(|r| r[from..].to_vec()).collect()
}

#[test]
fn a_parquet_soundings_file_reduces_as_its_csv_original_plain_or_geoparquet() {
    let demo_csv = repo().join("zoning-demo/soundings/launch-a.csv");
    let base = tempfile::tempdir().unwrap();
    let csv_out = base.path().join("csv");
    reduce(&repo().join("zoning-demo/project.toml"), &csv_out, "csv");
    let want = appended(&csv_out.join("launch-a.reduced.csv"));
    for (label, geo) in [("plain", None), ("geoparquet", Some(32724))] {
        let dir = base.path().join(label);
        std::fs::create_dir_all(&dir).unwrap();
        let pq = dir.join("launch-a.parquet");
        launch_a_as_parquet(&demo_csv, &pq, geo, &[]);
        let project = project_reading(&dir, &pq);
        let out = dir.join("out");
        reduce(&project, &out, "csv");
        let got = appended(&out.join("launch-a.reduced.csv"));
        assert_eq!(got.len(), want.len(), "{label}");
        for (r, (g, w)) in got.iter().zip(&want).enumerate() {
            assert_eq!(g, w, "{label}: row {}", r + 2);
        }
        // And to Parquet: the same statuses, the file's own columns passed through.
        let out_pq = dir.join("out-pq");
        reduce(&project, &out_pq, "parquet");
        let (schema, batches, _) = read_parquet(&out_pq.join("launch-a.reduced.parquet"));
        assert_eq!(schema.field(0).name(), "time");
        if geo.is_some() {
            assert_eq!(schema.field(1).name(), "geometry");
            assert_eq!(schema.field(1).data_type(), &DataType::Binary);
        }
        let status = column_text(&batches, "status");
        let want_status: Vec<&String> = want.iter().map(|r| &r[3]).collect();
        assert_eq!(status.iter().collect::<Vec<_>>(), want_status, "{label}");
    }
}

#[test]
fn nulls_in_a_parquet_file_are_bad_input_rows_and_a_wrong_crs_or_type_stops_the_file() {
    let demo_csv = repo().join("zoning-demo/soundings/launch-a.csv");
    let dir = tempfile::tempdir().unwrap();
    let pq = dir.path().join("launch-a.parquet");
    launch_a_as_parquet(&demo_csv, &pq, None, &[4, 9]);
    let project = project_reading(dir.path(), &pq);
    let out = dir.path().join("out");
    reduce(&project, &out, "csv");
    let (header, rows) = read_csv(&out.join("launch-a.reduced.csv"));
    let st = header.iter().position(|h| h == "status").unwrap();
    for i in [4usize, 9] {
        assert_eq!(rows[i][st], "bad_input");
        assert_eq!(rows[i][st + 1], "field 'depth_m': missing (null)");
    }
    let (_, demo_rows) = read_csv(&demo_csv);
    assert_eq!(rows.len(), demo_rows.len(), "no row dropped");
    // `ebbwise check` reads the Parquet file too, naming the 1-based row and the column.
    let c = ebbwise(&["check", project.to_str().unwrap()]);
    let err = stderr(&c);
    for row in [5, 10] {
        let want = format!("launch-a.parquet:{row}: field 'depth_m': missing (null)");
        assert!(err.contains(&want), "{want} not in:\n{err}");
    }
    assert!(
        err.contains(&format!("{} sounding rows read", 99_890)),
        "{err}"
    );
    // GeoParquet points in another CRS than the group's: refused, naming both.
    let geo = dir.path().join("geo.parquet");
    launch_a_as_parquet(&demo_csv, &geo, Some(32629), &[]);
    let project = project_reading(dir.path(), &geo);
    let err = refused(&project, &out);
    assert!(
        err.contains("geo.parquet") && err.contains("EPSG:32629") && err.contains("EPSG:32724"),
        "{err}"
    );
    // With x and y from the geometry, another mapping beyond the file's columns is refused
    // (not read out of bounds).
    let geo_ok = dir.path().join("geo-ok.parquet");
    launch_a_as_parquet(&demo_csv, &geo_ok, Some(32724), &[]);
    let project = project_reading(dir.path(), &geo_ok);
    let beyond = std::fs::read_to_string(&project)
        .unwrap()
        .replace("depth = \"depth_m\"", "depth = \"#5\"");
    assert!(beyond.contains("depth = \"#5\""));
    let beyond_project = dir.path().join("beyond.toml");
    std::fs::write(&beyond_project, beyond).unwrap();
    let err = refused(&beyond_project, &out);
    assert!(
        err.contains("only x and y can come from the geometry"),
        "{err}"
    );
    // Columns of text where numbers are mapped: refused for the file, naming the first.
    let (h, r) = read_csv(&demo_csv);
    let cols: Vec<ArrayRef> = (0..h.len())
        .map(|j| -> ArrayRef {
            Arc::new(
                r.iter()
                    .map(|row| Some(row[j].as_str()))
                    .collect::<arrow_array::StringArray>(),
            )
        })
        .collect();
    let schema = Arc::new(Schema::new(
        h.iter()
            .map(|n| Field::new(n, DataType::Utf8, true))
            .collect::<Vec<_>>(),
    ));
    let text = dir.path().join("text.parquet");
    let mut w = parquet::arrow::ArrowWriter::try_new(
        std::fs::File::create(&text).unwrap(),
        Arc::clone(&schema),
        None,
    )
    .unwrap();
    w.write(&RecordBatch::try_new(schema, cols).unwrap())
        .unwrap();
    w.close().unwrap();
    let project = project_reading(dir.path(), &text);
    let err = refused(&project, &out);
    assert!(
        err.contains("text.parquet")
            && err.contains("field 'easting'")
            && err.contains("a number column"),
        "{err}"
    );
}
