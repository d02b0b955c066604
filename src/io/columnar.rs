//! The soundings tables as typed columns (Apache Arrow): what a Parquet file and a pipeline's
//! record batches hold.
//!
//! * [`ReducedColumns`] builds the columns the reduction appends to every row (zone, tide,
//!   reduced depth, status, detail and, with uncertainty, the budget and verdict), typed: floats
//!   in metres, the zone and the status dictionary-encoded, `within_order` a boolean.
//! * [`TextColumns`] builds a CSV soundings file's own columns: the mapped time as a UTC
//!   timestamp, the mapped coordinates, depth and depth uncertainty as floats, every other
//!   column as the text it was.
//!
//! Every field carries its unit and meaning in the field's metadata (`unit`, `meaning`), so a
//! reader of the file needs no other document. Floats are stored at the decimals the CSV output
//! writes (4: 0.1 mm), so that the verdicts, which judge the values as written, read the same in
//! both formats.

use std::collections::HashMap;
use std::sync::Arc;

use arrow_array::builder::{
    BooleanBuilder, Float64Builder, Int8Builder, StringBuilder, TimestampMicrosecondBuilder,
    UInt32Builder,
};
use arrow_array::types::{Int8Type, UInt32Type};
use arrow_array::{ArrayRef, DictionaryArray, StringArray};
use arrow_schema::{DataType, Field, TimeUnit};

use super::numfmt::{round_to, HEIGHT_DECIMALS, UNCERTAINTY_DECIMALS};

/// Time zone of every timestamp column.
pub const UTC: &str = "UTC";

/// The Arrow type of every time column: microseconds since 1970-01-01T00:00:00Z, UTC.
pub fn timestamp_type() -> DataType {
    DataType::Timestamp(TimeUnit::Microsecond, Some(UTC.into()))
}

/// The Arrow type of the dictionary-encoded `status` column.
pub fn status_type() -> DataType {
    DataType::Dictionary(Box::new(DataType::Int8), Box::new(DataType::Utf8))
}

/// The Arrow type of the dictionary-encoded `zone` column.
pub fn zone_type() -> DataType {
    DataType::Dictionary(Box::new(DataType::UInt32), Box::new(DataType::Utf8))
}

/// Unit and meaning of a column the reduction writes (or reads as mapped), for the field
/// metadata; `("", "")` for a name it does not know.
pub fn column_unit_meaning(name: &str) -> (&'static str, &'static str) {
    match name {
        "zone" => ("", "zone id of the zoning; null outside every zone"),
        "tide_m" => (
            "m",
            "tide applied: water level above chart datum, positive up, 4 decimals; null when none",
        ),
        "reduced_depth_m" => (
            "m",
            "depth below chart datum, positive down (negative: a drying height), 4 decimals; null when not reduced",
        ),
        "status" => (
            "",
            "reduced | gap_filled | outside_zoning | no_gauge_data | gauge_flagged | bad_input",
        ),
        "status_detail" => ("", "why a row is not reduced, or how its tide was filled; null when there is nothing to say"),
        "u_tide_gauge_m" | "u_tide_datum_m" | "u_tide_range_m" | "u_tide_timing_m"
        | "u_tide_zone_m" => ("m", "one component of u_tide_m: standard uncertainty (1 sigma), 4 decimals"),
        "u_tide_m" => ("m", "standard uncertainty (1 sigma) of the tide, 4 decimals"),
        "u_sounding_m" => ("m", "standard uncertainty (1 sigma) of the observed depth, 4 decimals"),
        "u_tvu_m" => ("m", "total vertical uncertainty, standard (1 sigma), 4 decimals"),
        "u95_tvu_m" => ("m", "total vertical uncertainty at 95 % (k = 1.96), 4 decimals"),
        "allowed_u95_tvu_m" => ("m", "the chosen S-44 order's TVU limit at 95 % for the reduced depth, 4 decimals"),
        "within_order" => ("", "whether u95_tvu_m is within allowed_u95_tvu_m, both as written"),
        "time_utc" => ("", "time of the sounding, UTC, microseconds"),
        "line" => ("", "survey line"),
        "source_file" => ("", "soundings file the row comes from"),
        "source_line" => ("", "1-based line (CSV) or row (Parquet) of the sounding in its file"),
        _ => ("", ""),
    }
}

/// A field with its unit and meaning in its metadata.
pub fn field(name: &str, data_type: DataType, nullable: bool, unit: &str, meaning: &str) -> Field {
    let mut md = HashMap::new();
    if !unit.is_empty() {
        md.insert("unit".to_string(), unit.to_string());
    }
    if !meaning.is_empty() {
        md.insert("meaning".to_string(), meaning.to_string());
    }
    Field::new(name, data_type, nullable).with_metadata(md)
}

fn known_field(name: &str, data_type: DataType, nullable: bool) -> Field {
    let (unit, meaning) = column_unit_meaning(name);
    field(name, data_type, nullable, unit, meaning)
}

/// The uncertainty columns' names, in order (the ten floats, then `within_order`).
pub type UncertaintyNames = [&'static str; 11];

/// Builds the columns the reduction appends to each row.
pub struct ReducedColumns {
    zone_values: ArrayRef,
    status_values: ArrayRef,
    zone: UInt32Builder,
    tide_m: Float64Builder,
    reduced_depth_m: Float64Builder,
    status: Int8Builder,
    detail: StringBuilder,
    unc: Option<(Vec<Float64Builder>, BooleanBuilder)>,
    unc_names: UncertaintyNames,
}

impl ReducedColumns {
    /// Columns for rows whose zones are `zone_ids` (a zone is written as its index), statuses
    /// `statuses` (written by index), with the uncertainty columns `unc_names` when `with_unc`.
    pub fn new(
        zone_ids: &[&str],
        statuses: &[&str],
        with_unc: bool,
        unc_names: UncertaintyNames,
        capacity: usize,
    ) -> Self {
        ReducedColumns {
            zone_values: Arc::new(StringArray::from_iter_values(zone_ids)),
            status_values: Arc::new(StringArray::from_iter_values(statuses)),
            zone: UInt32Builder::with_capacity(capacity),
            tide_m: Float64Builder::with_capacity(capacity),
            reduced_depth_m: Float64Builder::with_capacity(capacity),
            status: Int8Builder::with_capacity(capacity),
            detail: StringBuilder::with_capacity(capacity, capacity * 4),
            unc: with_unc.then(|| {
                (
                    (0..10)
                        .map(|_| Float64Builder::with_capacity(capacity))
                        .collect(),
                    BooleanBuilder::with_capacity(capacity),
                )
            }),
            unc_names,
        }
    }

    /// The fields, in column order.
    pub fn fields(&self) -> Vec<Field> {
        let mut f = vec![
            known_field("zone", zone_type(), true),
            known_field("tide_m", DataType::Float64, true),
            known_field("reduced_depth_m", DataType::Float64, true),
            known_field("status", status_type(), false),
            known_field("status_detail", DataType::Utf8, true),
        ];
        if self.unc.is_some() {
            for n in &self.unc_names[..10] {
                f.push(known_field(n, DataType::Float64, true));
            }
            f.push(known_field(self.unc_names[10], DataType::Boolean, true));
        }
        f
    }

    /// Appends one row: its zone index, (tide, reduced depth) in metres, status index, detail
    /// ("" for none) and uncertainty values with the verdict. Floats are stored at the
    /// decimals the CSV output writes.
    pub fn push(
        &mut self,
        zone: Option<usize>,
        tide: Option<(f64, f64)>,
        status: usize,
        detail: &str,
        unc: Option<&([f64; 10], bool)>,
    ) {
        self.zone.append_option(zone.map(|z| z as u32));
        match tide {
            Some((t, d)) => {
                self.tide_m.append_value(round_to(t, HEIGHT_DECIMALS));
                self.reduced_depth_m
                    .append_value(round_to(d, HEIGHT_DECIMALS));
            }
            None => {
                self.tide_m.append_null();
                self.reduced_depth_m.append_null();
            }
        }
        self.status.append_value(status as i8);
        if detail.is_empty() {
            self.detail.append_null();
        } else {
            self.detail.append_value(detail);
        }
        if let Some((cols, within)) = self.unc.as_mut() {
            match unc {
                Some((vals, w)) => {
                    for (b, v) in cols.iter_mut().zip(vals) {
                        b.append_value(round_to(*v, UNCERTAINTY_DECIMALS));
                    }
                    within.append_value(*w);
                }
                None => {
                    for b in cols.iter_mut() {
                        b.append_null();
                    }
                    within.append_null();
                }
            }
        }
    }

    /// The arrays built so far, in column order; the builders start again empty.
    pub fn finish(&mut self) -> Vec<ArrayRef> {
        let zone = DictionaryArray::<UInt32Type>::try_new(
            self.zone.finish(),
            Arc::clone(&self.zone_values),
        )
        .expect("zone keys index the zone list");
        let status = DictionaryArray::<Int8Type>::try_new(
            self.status.finish(),
            Arc::clone(&self.status_values),
        )
        .expect("status keys index the status list");
        let mut out: Vec<ArrayRef> = vec![
            Arc::new(zone),
            Arc::new(self.tide_m.finish()),
            Arc::new(self.reduced_depth_m.finish()),
            Arc::new(status),
            Arc::new(self.detail.finish()),
        ];
        if let Some((cols, within)) = self.unc.as_mut() {
            for b in cols.iter_mut() {
                out.push(Arc::new(b.finish()));
            }
            out.push(Arc::new(within.finish()));
        }
        out
    }
}

/// What one of a CSV soundings file's columns holds, for its typed form.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TextKind {
    /// The mapped time: a UTC timestamp.
    Time,
    /// A mapped number (coordinate, depth, depth uncertainty): a float as written.
    Number,
    /// Any other column: its text.
    Text,
}

enum TextColumn {
    Time(TimestampMicrosecondBuilder),
    Number(Float64Builder),
    Text(StringBuilder),
}

/// Builds a CSV soundings file's own columns, typed as [`TextKind`] says.
pub struct TextColumns {
    fields: Vec<Field>,
    cols: Vec<TextColumn>,
}

/// UTC seconds to whole microseconds.
pub fn micros_of(t_s: f64) -> i64 {
    (t_s * 1e6).round() as i64
}

/// Whole microseconds to UTC seconds.
pub fn seconds_of(us: i64) -> f64 {
    // Split so that the seconds stay exact for any realistic time.
    (us.div_euclid(1_000_000)) as f64 + (us.rem_euclid(1_000_000)) as f64 / 1e6
}

impl TextColumns {
    /// Columns named `names`, of kinds `kinds` (same length).
    pub fn new(names: &[String], kinds: &[TextKind], capacity: usize) -> Self {
        let mut fields = Vec::with_capacity(names.len());
        let mut cols = Vec::with_capacity(names.len());
        for (n, k) in names.iter().zip(kinds) {
            match k {
                TextKind::Time => {
                    fields.push(field(
                        n,
                        timestamp_type(),
                        true,
                        "",
                        "time of the sounding, UTC, microseconds",
                    ));
                    cols.push(TextColumn::Time(
                        TimestampMicrosecondBuilder::with_capacity(capacity).with_timezone(UTC),
                    ));
                }
                TextKind::Number => {
                    fields.push(field(
                        n,
                        DataType::Float64,
                        true,
                        "",
                        "the file's value as written",
                    ));
                    cols.push(TextColumn::Number(Float64Builder::with_capacity(capacity)));
                }
                TextKind::Text => {
                    fields.push(field(n, DataType::Utf8, true, "", ""));
                    cols.push(TextColumn::Text(StringBuilder::with_capacity(
                        capacity,
                        capacity * 8,
                    )));
                }
            }
        }
        TextColumns { fields, cols }
    }

    /// The fields, in column order.
    pub fn fields(&self) -> &[Field] {
        &self.fields
    }

    /// Number of columns.
    pub fn len(&self) -> usize {
        self.cols.len()
    }

    /// Whether there are no columns.
    pub fn is_empty(&self) -> bool {
        self.cols.is_empty()
    }

    /// The kind of column `i`.
    pub fn kind(&self, i: usize) -> TextKind {
        match self.cols[i] {
            TextColumn::Time(_) => TextKind::Time,
            TextColumn::Number(_) => TextKind::Number,
            TextColumn::Text(_) => TextKind::Text,
        }
    }

    /// Appends a time (UTC seconds) to time column `i`, or a null.
    pub fn push_time(&mut self, i: usize, t_s: Option<f64>) {
        if let TextColumn::Time(b) = &mut self.cols[i] {
            b.append_option(t_s.map(micros_of));
        }
    }

    /// Appends a number to number column `i`, or a null.
    pub fn push_number(&mut self, i: usize, v: Option<f64>) {
        if let TextColumn::Number(b) = &mut self.cols[i] {
            b.append_option(v);
        }
    }

    /// Appends a text to text column `i`, or a null (a field the row does not have).
    pub fn push_text(&mut self, i: usize, s: Option<&str>) {
        if let TextColumn::Text(b) = &mut self.cols[i] {
            b.append_option(s);
        }
    }

    /// The arrays built so far, in column order; the builders start again empty.
    pub fn finish(&mut self) -> Vec<ArrayRef> {
        self.cols
            .iter_mut()
            .map(|c| -> ArrayRef {
                match c {
                    TextColumn::Time(b) => Arc::new(b.finish()),
                    TextColumn::Number(b) => Arc::new(b.finish()),
                    TextColumn::Text(b) => Arc::new(b.finish()),
                }
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use arrow_array::{Array, BooleanArray, Float64Array};

    #[test]
    fn reduced_columns_store_rows_at_the_written_decimals_and_nulls_where_csv_is_empty() {
        let names = [
            "a", "b", "c", "d", "e", "f", "g", "h", "u95", "allowed", "within",
        ];
        let mut c = ReducedColumns::new(&["Z1", "Z2"], &["reduced", "bad_input"], true, names, 4);
        let vals = [
            0.01234, 0.0, 0.0, 0.0, 0.0, 0.1, 0.2, 0.3, 0.58804, 0.5, 0.0,
        ];
        let mut v10 = [0.0; 10];
        v10.copy_from_slice(&vals[..10]);
        c.push(
            Some(1),
            Some((1.23456, 10.00004)),
            0,
            "",
            Some(&(v10, false)),
        );
        c.push(None, None, 1, "field 'depth': expected a depth", None);
        let a = c.finish();
        assert_eq!(a.len(), c.fields().len());
        let tide = a[1].as_any().downcast_ref::<Float64Array>().unwrap();
        assert_eq!(tide.value(0), 1.2346);
        assert!(tide.is_null(1));
        let depth = a[2].as_any().downcast_ref::<Float64Array>().unwrap();
        assert_eq!(depth.value(0), 10.0);
        let zone = a[0]
            .as_any()
            .downcast_ref::<DictionaryArray<UInt32Type>>()
            .unwrap();
        assert_eq!(zone.keys().value(0), 1);
        assert!(zone.is_null(1));
        let detail = a[4].as_any().downcast_ref::<StringArray>().unwrap();
        assert!(detail.is_null(0));
        assert_eq!(detail.value(1), "field 'depth': expected a depth");
        let u95 = a[5 + 8].as_any().downcast_ref::<Float64Array>().unwrap();
        assert_eq!(u95.value(0), 0.588);
        let within = a[15].as_any().downcast_ref::<BooleanArray>().unwrap();
        assert!(!within.value(0));
        assert!(within.is_null(1));
    }

    #[test]
    fn micro_seconds_round_trip_times_to_the_microsecond() {
        for t in [1_780_000_000.123_456, 315_532_800.0, 4_102_444_799.999_999] {
            let back = seconds_of(micros_of(t));
            assert!((back - t).abs() < 0.6e-6, "{t} → {back}");
        }
        assert_eq!(micros_of(1.5), 1_500_000);
    }
}

/// A record batch of soundings seen through a layout: the mapped columns in forms that read
/// one row at a time ([`BatchView::row`]). Columns beyond the batch's (the x and y a layout
/// maps to a GeoParquet geometry) are read from `geometry`.
pub struct BatchView<'b> {
    batch: &'b arrow_array::RecordBatch,
    time: TimeView,
    x: Coord,
    y: Coord,
    depth: arrow_array::Float64Array,
    line: Option<arrow_array::StringArray>,
    u_depth: Option<arrow_array::Float64Array>,
    names: &'b [String],
}

enum TimeView {
    /// Whole units since 1970 and seconds per unit, and the offset to add for naive times (s).
    Stamps(arrow_array::Int64Array, TimeUnit, f64),
    Text(arrow_array::StringArray),
    /// Unix seconds as numbers (`time_format = "unix_s"`).
    UnixSeconds(arrow_array::Float64Array),
}

enum Coord {
    Value(arrow_array::Float64Array),
    /// From the WKB points of this column: x (false) or y (true).
    Point(arrow_array::ArrayRef, bool),
}

/// Row `r` of a WKB column (binary or large binary), when not null.
fn wkb_at(g: &arrow_array::ArrayRef, r: usize) -> Option<&[u8]> {
    use arrow_array::Array;
    if g.is_null(r) {
        return None;
    }
    match g.data_type() {
        DataType::Binary => g
            .as_any()
            .downcast_ref::<arrow_array::BinaryArray>()
            .map(|b| b.value(r)),
        DataType::LargeBinary => g
            .as_any()
            .downcast_ref::<arrow_array::LargeBinaryArray>()
            .map(|b| b.value(r)),
        _ => None,
    }
}

/// Why a batch's column cannot be read as its mapping says: the column and what is wrong.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnProblem {
    /// Column name.
    pub column: String,
    /// What was expected and found.
    pub message: String,
}

fn as_f64(
    batch: &arrow_array::RecordBatch,
    i: usize,
    names: &[String],
    what: &str,
) -> Result<arrow_array::Float64Array, ColumnProblem> {
    let a = batch.column(i);
    let numeric = a.data_type().is_numeric();
    if !numeric {
        return Err(ColumnProblem {
            column: names[i].clone(),
            message: format!("expected {what} (a number column), found {}", a.data_type()),
        });
    }
    let c = arrow_cast::cast(a, &DataType::Float64).map_err(|e| ColumnProblem {
        column: names[i].clone(),
        message: format!("cannot read {} as {what}: {e}", a.data_type()),
    })?;
    Ok(c.as_any()
        .downcast_ref::<arrow_array::Float64Array>()
        .expect("cast to Float64 gives Float64")
        .clone())
}

impl<'b> BatchView<'b> {
    /// Views `batch` through the layout's mapped columns `m` (indices into `names`, which are
    /// the batch's columns followed by any geometry x / y), with `geometry` the column of WKB
    /// points that x and y beyond the batch come from, and `naive_offset_s` the offset of a
    /// timestamp column without a time zone (seconds to add to local time to get UTC), if any;
    /// `unix_s` when a numeric time column holds Unix seconds.
    pub fn new(
        batch: &'b arrow_array::RecordBatch,
        m: &crate::io::soundings::MappedColumns,
        names: &'b [String],
        geometry: Option<usize>,
        naive_offset_s: Option<f64>,
        unix_s: bool,
    ) -> Result<Self, ColumnProblem> {
        use arrow_array::cast::AsArray;
        use arrow_array::types::*;
        let n = batch.num_columns();
        let ta = batch.column(m.time);
        let time = match ta.data_type() {
            DataType::Timestamp(unit, tz) => {
                let add = match (tz, naive_offset_s) {
                    (Some(_), _) => 0.0,
                    (None, Some(off)) => off,
                    (None, None) => {
                        return Err(ColumnProblem {
                            column: names[m.time].clone(),
                            message: "the timestamps have no time zone and none is configured (set naive_time_utc_offset, or write the column with time zone UTC)".into(),
                        })
                    }
                };
                let raw: arrow_array::Int64Array = match unit {
                    TimeUnit::Second => ta.as_primitive::<TimestampSecondType>().reinterpret_cast(),
                    TimeUnit::Millisecond => ta.as_primitive::<TimestampMillisecondType>().reinterpret_cast(),
                    TimeUnit::Microsecond => ta.as_primitive::<TimestampMicrosecondType>().reinterpret_cast(),
                    TimeUnit::Nanosecond => ta.as_primitive::<TimestampNanosecondType>().reinterpret_cast(),
                };
                TimeView::Stamps(raw, *unit, add)
            }
            DataType::Utf8 | DataType::LargeUtf8 | DataType::Utf8View | DataType::Dictionary(..) => {
                let c = arrow_cast::cast(ta, &DataType::Utf8).map_err(|e| ColumnProblem {
                    column: names[m.time].clone(),
                    message: format!("cannot read {} as text: {e}", ta.data_type()),
                })?;
                TimeView::Text(c.as_string::<i32>().clone())
            }
            t if t.is_numeric() && unix_s => {
                TimeView::UnixSeconds(as_f64(batch, m.time, names, "Unix seconds")?)
            }
            other => {
                return Err(ColumnProblem {
                    column: names[m.time].clone(),
                    message: format!(
                        "expected times (a timestamp column, text as time_format says, or numbers with time_format = \"unix_s\"), found {other}"
                    ),
                })
            }
        };
        let coord = |i: usize, is_y: bool| -> Result<Coord, ColumnProblem> {
            if i < n {
                Ok(Coord::Value(as_f64(batch, i, names, "a coordinate")?))
            } else {
                let g =
                    geometry.expect("a layout maps x or y beyond the columns only to a geometry");
                Ok(Coord::Point(Arc::clone(batch.column(g)), is_y))
            }
        };
        let line = match m.line {
            Some(i) => {
                let a = batch.column(i);
                let c = arrow_cast::cast(a, &DataType::Utf8).map_err(|e| ColumnProblem {
                    column: names[i].clone(),
                    message: format!("cannot read {} as a line name: {e}", a.data_type()),
                })?;
                Some(c.as_string::<i32>().clone())
            }
            None => None,
        };
        Ok(BatchView {
            batch,
            time,
            x: coord(m.x, false)?,
            y: coord(m.y, true)?,
            depth: as_f64(batch, m.depth, names, "a depth in metres")?,
            line,
            u_depth: m
                .u_depth
                .map(|i| as_f64(batch, i, names, "a standard uncertainty in metres"))
                .transpose()?,
            names,
        })
    }

    /// Row `r`'s values as read (the depth with the file's sign), or which field is missing.
    pub fn row(
        &self,
        r: usize,
        m: &crate::io::soundings::MappedColumns,
        layout: &crate::io::soundings::SoundingLayout,
    ) -> Result<crate::io::soundings::RawValues<'_>, crate::io::soundings::RowProblem> {
        use crate::io::soundings::RowProblem;
        use arrow_array::Array;
        let missing = |i: usize| RowProblem {
            field: self.names[i].clone(),
            message: "missing (null)".into(),
        };
        let num_at =
            |a: &arrow_array::Float64Array, r: usize, i: usize| -> Result<f64, RowProblem> {
                if a.is_null(r) {
                    return Err(missing(i));
                }
                let v = a.value(r);
                if v.is_finite() {
                    Ok(v)
                } else {
                    Err(RowProblem {
                        field: self.names[i].clone(),
                        message: format!("expected a finite number, found {v}"),
                    })
                }
            };
        let t_s = match &self.time {
            TimeView::Stamps(a, unit, add) => {
                if a.is_null(r) {
                    return Err(missing(m.time));
                }
                let v = a.value(r);
                let per_s: i64 = match unit {
                    TimeUnit::Second => 1,
                    TimeUnit::Millisecond => 1_000,
                    TimeUnit::Microsecond => 1_000_000,
                    TimeUnit::Nanosecond => 1_000_000_000,
                };
                v.div_euclid(per_s) as f64 + v.rem_euclid(per_s) as f64 / per_s as f64 + add
            }
            TimeView::Text(a) => {
                if a.is_null(r) {
                    return Err(missing(m.time));
                }
                let s = a.value(r);
                layout.time_text_checked(s)?
            }
            TimeView::UnixSeconds(a) => num_at(a, r, m.time)?,
        };
        let num = |a: &arrow_array::Float64Array, i: usize| num_at(a, r, i);
        let coord = |c: &Coord, i: usize| -> Result<f64, RowProblem> {
            match c {
                Coord::Value(a) => num(a, i),
                Coord::Point(g, is_y) => {
                    if g.is_null(r) {
                        return Err(missing(i));
                    }
                    let bytes: &[u8] = wkb_at(g, r).unwrap_or(&[]);
                    let (x, y) =
                        crate::io::parquet_file::wkb_point(bytes).ok_or_else(|| RowProblem {
                            field: self.names[i].clone(),
                            message: "the geometry is not a WKB point".into(),
                        })?;
                    let v = if *is_y { y } else { x };
                    if v.is_finite() {
                        Ok(v)
                    } else {
                        Err(RowProblem {
                            field: self.names[i].clone(),
                            message: format!("expected a finite coordinate, found {v}"),
                        })
                    }
                }
            }
        };
        let x = coord(&self.x, m.x)?;
        let y = coord(&self.y, m.y)?;
        let depth = num(&self.depth, m.depth)?;
        let line_id = match &self.line {
            Some(a) if !a.is_null(r) => a.value(r),
            _ => "",
        };
        let u_depth = match (&self.u_depth, m.u_depth) {
            (Some(a), Some(i)) => Some(num(a, i)?),
            _ => None,
        };
        Ok(crate::io::soundings::RawValues {
            t_s,
            x,
            y,
            depth_as_written_m: depth,
            line_id,
            u_depth_m: u_depth,
        })
    }

    /// Column `i`'s value in row `r` as text, for a message (for x or y read from a geometry,
    /// the point's coordinate).
    pub fn written(&self, i: usize, r: usize) -> String {
        if i >= self.batch.num_columns() {
            let c = if i == self.batch.num_columns() {
                &self.x
            } else {
                &self.y
            };
            return match c {
                Coord::Point(g, is_y) => wkb_at(g, r)
                    .and_then(crate::io::parquet_file::wkb_point)
                    .map(|(x, y)| if *is_y { y } else { x }.to_string())
                    .unwrap_or_default(),
                Coord::Value(_) => String::new(),
            };
        }
        let opts = arrow_cast::display::FormatOptions::default();
        arrow_cast::display::ArrayFormatter::try_new(self.batch.column(i).as_ref(), &opts)
            .map(|f| f.value(r).to_string())
            .unwrap_or_default()
    }

    /// Rows in the batch.
    pub fn rows(&self) -> usize {
        self.batch.num_rows()
    }

    /// Row `r`'s line, when the layout maps one and the row has it (for a row that cannot be
    /// read as a whole).
    pub fn line_text(&self, r: usize) -> Option<&str> {
        use arrow_array::Array;
        self.line
            .as_ref()
            .filter(|a| !a.is_null(r))
            .map(|a| a.value(r))
    }

    /// Row `r`'s position when its x and y read as finite numbers (for a row that cannot be
    /// read as a whole, to place it on a map).
    pub fn position(&self, r: usize) -> Option<(f64, f64)> {
        let one = |c: &Coord| -> Option<f64> {
            use arrow_array::Array;
            let v = match c {
                Coord::Value(a) => (!a.is_null(r)).then(|| a.value(r))?,
                Coord::Point(g, is_y) => {
                    let (x, y) = crate::io::parquet_file::wkb_point(wkb_at(g, r)?)?;
                    if *is_y {
                        y
                    } else {
                        x
                    }
                }
            };
            v.is_finite().then_some(v)
        };
        Some((one(&self.x)?, one(&self.y)?))
    }
}

/// A record batch's rows as CSV text (for a CSV output of a Parquet input): every value as
/// Arrow's display writes it, times as ISO 8601 UTC (`2026-06-14T07:30:00.250Z`, to the
/// millisecond or, when finer, the microsecond), a null as an empty field.
pub struct RowText<'b> {
    columns: Vec<ColumnText<'b>>,
}

enum ColumnText<'b> {
    /// A timestamp column: its values, units per second, and whether it has a time zone (an
    /// instant, written in UTC with `Z`) or not (a naive time, written as it is, without `Z`).
    Time(arrow_array::Int64Array, i64, bool),
    Display(arrow_cast::display::ArrayFormatter<'b>),
}

impl<'b> RowText<'b> {
    /// The text forms of `batch`'s columns, or the first column whose type has none.
    pub fn new(batch: &'b arrow_array::RecordBatch) -> Result<Self, ColumnProblem> {
        use arrow_array::cast::AsArray;
        use arrow_array::types::*;
        let opts = arrow_cast::display::FormatOptions::default();
        let schema = batch.schema();
        let columns = batch
            .columns()
            .iter()
            .zip(schema.fields())
            .map(|(c, f)| -> Result<ColumnText<'b>, ColumnProblem> {
                if let DataType::Timestamp(unit, tz) = c.data_type() {
                    let (raw, per_s): (arrow_array::Int64Array, i64) = match unit {
                        TimeUnit::Second => (c.as_primitive::<TimestampSecondType>().reinterpret_cast(), 1),
                        TimeUnit::Millisecond => (c.as_primitive::<TimestampMillisecondType>().reinterpret_cast(), 1_000),
                        TimeUnit::Microsecond => (c.as_primitive::<TimestampMicrosecondType>().reinterpret_cast(), 1_000_000),
                        TimeUnit::Nanosecond => (c.as_primitive::<TimestampNanosecondType>().reinterpret_cast(), 1_000_000_000),
                    };
                    return Ok(ColumnText::Time(raw, per_s, tz.is_some()));
                }
                arrow_cast::display::ArrayFormatter::try_new(c.as_ref(), &opts)
                    .map(ColumnText::Display)
                    .map_err(|e| ColumnProblem {
                        column: f.name().clone(),
                        message: format!(
                            "a {} column cannot be written as CSV text ({e}); write Parquet (--format parquet)",
                            f.data_type()
                        ),
                    })
            })
            .collect::<Result<Vec<_>, _>>()?;
        Ok(RowText { columns })
    }

    /// Appends row `r`'s fields, comma-separated and quoted where needed.
    pub fn push_row(&self, out: &mut Vec<u8>, r: usize) {
        use arrow_array::Array;
        use std::fmt::Write;
        let mut s = String::new();
        for (i, c) in self.columns.iter().enumerate() {
            if i > 0 {
                out.push(b',');
            }
            match c {
                ColumnText::Time(a, per_s, zoned) => {
                    if !a.is_null(r) {
                        let v = a.value(r);
                        let t_s = v.div_euclid(*per_s) as f64
                            + v.rem_euclid(*per_s) as f64 / *per_s as f64;
                        crate::io::timefmt::push_utc_bytes(out, t_s);
                        if !*zoned && out.last() == Some(&b'Z') {
                            out.pop();
                        }
                    }
                }
                ColumnText::Display(f) => {
                    s.clear();
                    let _ = write!(s, "{}", f.value(r));
                    crate::io::soundings::push_csv_field(out, &s);
                }
            }
        }
    }
}
