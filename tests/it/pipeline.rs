//! The library's entry point reduces as the `ebbwise` command does: the demo's launch A, cut
//! into record batches reduced on two threads at once, gives every value of the command's
//! reduced CSV (at its written precision).

use std::sync::Arc;

use arrow_array::cast::AsArray;
use arrow_array::{Array, ArrayRef, RecordBatch, StringArray};
use arrow_schema::{DataType, Field, Schema};
use ebbwise::pipeline::{PipelineError, PointTide, Reducer};

use super::{ebbwise, read_csv, repo, stderr};

fn text_of(a: &ArrayRef, r: usize) -> String {
    if a.is_null(r) {
        return String::new();
    }
    match a.data_type() {
        DataType::Float64 => format!(
            "{:.4}",
            a.as_primitive::<arrow_array::types::Float64Type>().value(r)
        ),
        DataType::Boolean => if a.as_boolean().value(r) { "yes" } else { "no" }.into(),
        DataType::Utf8 => a.as_string::<i32>().value(r).into(),
        DataType::Dictionary(k, _) if **k == DataType::Int8 => {
            let d = a.as_dictionary::<arrow_array::types::Int8Type>();
            d.values()
                .as_string::<i32>()
                .value(d.keys().value(r) as usize)
                .into()
        }
        DataType::Dictionary(..) => {
            let d = a.as_dictionary::<arrow_array::types::UInt32Type>();
            d.values()
                .as_string::<i32>()
                .value(d.keys().value(r) as usize)
                .into()
        }
        other => panic!("{other}"),
    }
}

#[test]
fn record_batches_reduced_on_two_threads_equal_the_commands_reduced_file() {
    let project = repo().join("zoning-demo/project.toml");
    let out = tempfile::tempdir().unwrap();
    let o = ebbwise(&[
        "reduce",
        project.to_str().unwrap(),
        "--out",
        out.path().to_str().unwrap(),
        "--no-progress",
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let (header, want) = read_csv(&out.path().join("launch-a.reduced.csv"));
    // The input as text columns, as a pipeline that read the CSV itself would have it.
    let (in_header, rows) = read_csv(&repo().join("zoning-demo/soundings/launch-a.csv"));
    let schema = Arc::new(Schema::new(
        in_header
            .iter()
            .map(|n| Field::new(n, DataType::Utf8, true))
            .collect::<Vec<_>>(),
    ));
    let reducer = Reducer::open(&project, 0).unwrap();
    fn is_send_sync<T: Send + Sync>(_: &T) {}
    is_send_sync(&reducer);
    // Numbers typed as numbers (the reducer refuses text where it wants numbers).
    let batches: Vec<RecordBatch> = rows
        .chunks(5_000)
        .map(|chunk| {
            let cols: Vec<ArrayRef> = (0..in_header.len())
                .map(|j| -> ArrayRef {
                    if (1..=3).contains(&j) {
                        Arc::new(
                            chunk
                                .iter()
                                .map(|r| r[j].parse::<f64>().ok())
                                .collect::<arrow_array::Float64Array>(),
                        )
                    } else {
                        Arc::new(
                            chunk
                                .iter()
                                .map(|r| Some(r[j].as_str()))
                                .collect::<StringArray>(),
                        )
                    }
                })
                .collect();
            let fields: Vec<Field> = (0..in_header.len())
                .map(|j| {
                    let t = if (1..=3).contains(&j) {
                        DataType::Float64
                    } else {
                        DataType::Utf8
                    };
                    Field::new(schema.field(j).name(), t, true)
                })
                .collect();
            RecordBatch::try_new(Arc::new(Schema::new(fields)), cols).unwrap()
        })
        .collect();
    // Two threads, taking every other batch.
    let mut reduced: Vec<Option<RecordBatch>> = vec![None; batches.len()];
    std::thread::scope(|s| {
        let hs: Vec<_> = (0..2)
            .map(|k| {
                let (r, b) = (&reducer, &batches);
                s.spawn(move || {
                    (k..b.len())
                        .step_by(2)
                        .map(|i| (i, r.reduce(&b[i]).unwrap()))
                        .collect::<Vec<_>>()
                })
            })
            .collect();
        for h in hs {
            for (i, b) in h.join().unwrap() {
                reduced[i] = Some(b);
            }
        }
    });
    let from = header.iter().position(|h| h == "zone").unwrap();
    let mut row = 0;
    for b in reduced.into_iter().map(Option::unwrap) {
        for r in 0..b.num_rows() {
            for (j, name) in header.iter().enumerate().skip(from) {
                let got = text_of(b.column_by_name(name).unwrap(), r);
                assert_eq!(got, want[row][j], "row {} column {name}", row + 2);
            }
            row += 1;
        }
    }
    assert_eq!(row, want.len(), "one output row per input row");
    // The point facade agrees with the batch: the first sounding's tide.
    let t_s = chrono::DateTime::parse_from_rfc3339(&rows[0][0])
        .unwrap()
        .timestamp_millis() as f64
        / 1000.0;
    let x: f64 = rows[0][1].parse().unwrap();
    let y: f64 = rows[0][2].parse().unwrap();
    match reducer.tide_at(x, y, t_s) {
        PointTide::Tide {
            zone,
            tide_m,
            u_tide_m,
            ..
        } => {
            let zi = header.iter().position(|h| h == "zone").unwrap();
            let ti = header.iter().position(|h| h == "tide_m").unwrap();
            let ui = header.iter().position(|h| h == "u_tide_m").unwrap();
            assert_eq!(zone, want[0][zi]);
            assert_eq!(format!("{tide_m:.4}"), want[0][ti]);
            assert_eq!(format!("{:.4}", u_tide_m.unwrap()), want[0][ui]);
        }
        other => panic!("{other:?}"),
    }
    assert_eq!(reducer.order(), Some("special"));
}

#[test]
fn a_batch_without_the_mapped_columns_or_a_missing_group_is_refused_by_name() {
    let project = repo().join("zoning-demo/project.toml");
    match Reducer::open(&project, 7) {
        Err(PipelineError::Input(e)) => {
            assert!(e.to_string().contains("no soundings group 7"), "{e}")
        }
        Err(e) => panic!("{e}"),
        Ok(_) => panic!("group 7 accepted"),
    }
    let reducer = Reducer::open(&project, 0).unwrap();
    let schema = Arc::new(Schema::new(vec![Field::new("time", DataType::Utf8, true)]));
    let b = RecordBatch::try_new(
        schema,
        vec![Arc::new(StringArray::from(vec!["2026-06-14T10:00:00Z"])) as ArrayRef],
    )
    .unwrap();
    let e = reducer.reduce(&b).unwrap_err().to_string();
    assert!(e.contains("easting"), "{e}");
}
