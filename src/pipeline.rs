//! # The reduction for pipelines
//!
//! Load a project once, then reduce Apache Arrow record batches of soundings to record batches
//! of reduced soundings: the same reduction, checks, statuses and uncertainty as
//! `ebbwise reduce`, with no file read or written per batch. A [`Reducer`] is `Send + Sync`:
//! share one across threads (or load one per worker process) and call [`Reducer::reduce`] on
//! as many batches at once as there are cores.
//!
//! **Input columns.** A batch holds the columns of one `[[soundings]]` group of the project,
//! named as its `columns` mapping says: the time (a timestamp of any unit with a time zone, or
//! text / Unix seconds as the group's `time_format` says), x and y in the group's CRS, the
//! observed depth in metres (with the group's `depth_sign`), and optionally the line and the
//! depth's standard uncertainty `u_depth` in metres. Other columns pass through.
//!
//! **Output columns.** The input's columns unchanged, then:
//!
//! | column | type | unit | content |
//! |---|---|---|---|
//! | `zone` | dictionary<uint32, utf8> | | zone id; null outside every zone |
//! | `tide_m` | float64 | m, positive up | tide applied, above chart datum; null when none |
//! | `reduced_depth_m` | float64 | m, positive down | depth below chart datum; negative: a drying height |
//! | `status` | dictionary<int8, utf8> | | `reduced`, `gap_filled`, `outside_zoning`, `no_gauge_data`, `gauge_flagged`, `bad_input` |
//! | `status_detail` | utf8 | | why a row is not reduced, or how its tide was filled; null when nothing to say |
//! | `u_tide_gauge_m` … `u_tide_zone_m` | float64 | m, 1σ | the five components of `u_tide_m` |
//! | `u_tide_m` | float64 | m, 1σ | standard uncertainty of the tide |
//! | `u_sounding_m` | float64 | m, 1σ | standard uncertainty of the observed depth |
//! | `u_tvu_m` | float64 | m, 1σ | total vertical uncertainty |
//! | `u95_tvu_m` | float64 | m, 95 % | total vertical uncertainty at 95 % (k = 1.96) |
//! | `allowed_u95_tvu_m` | float64 | m, 95 % | the chosen IHO S-44 order's limit at the reduced depth |
//! | `within_order` | bool | | `u95_tvu_m` within `allowed_u95_tvu_m`, both as written |
//!
//! The uncertainty columns are there when the project has an `[uncertainty]` table. Floats are
//! stored at 4 decimals (0.1 mm), as the CSV output writes them. Every field carries `unit`
//! and `meaning` in its metadata.
//!
//! ```
//! use std::sync::Arc;
//! use arrow_array::{Array, Float64Array, RecordBatch, StringArray, TimestampMicrosecondArray};
//! use arrow_schema::{DataType, Field, Schema, TimeUnit};
//! use ebbwise::pipeline::{PointTide, Reducer};
//!
//! // The bundled demo survey; its first soundings group is launch A's
//! // (time, easting, northing, depth_m, line in UTM zone 24S).
//! let project = concat!(env!("CARGO_MANIFEST_DIR"), "/zoning-demo/project.toml");
//! let reducer = Reducer::open(project.as_ref(), 0).unwrap();
//!
//! let utc = DataType::Timestamp(TimeUnit::Microsecond, Some("UTC".into()));
//! let schema = Arc::new(Schema::new(vec![
//!     Field::new("time", utc, false),
//!     Field::new("easting", DataType::Float64, false),
//!     Field::new("northing", DataType::Float64, false),
//!     Field::new("depth_m", DataType::Float64, false),
//!     Field::new("line", DataType::Utf8, false),
//! ]));
//! // 2026-06-14T10:00:00Z, twice: once inside zone VW1, once far outside the zoning.
//! let t_us = 1_781_431_200_000_000_i64;
//! let batch = RecordBatch::try_new(schema, vec![
//!     Arc::new(TimestampMicrosecondArray::from(vec![t_us, t_us]).with_timezone("UTC")),
//!     Arc::new(Float64Array::from(vec![722_430.46, 100_000.0])),
//!     Arc::new(Float64Array::from(vec![4_725_456.43, 100_000.0])),
//!     Arc::new(Float64Array::from(vec![4.2, 4.2])),
//!     Arc::new(StringArray::from(vec!["A-001", "A-001"])),
//! ]).unwrap();
//!
//! let reduced = reducer.reduce(&batch).unwrap();
//! assert_eq!(reduced.num_rows(), 2);
//! let status = reducer.statuses(&reduced).unwrap();
//! assert_eq!(status, ["reduced", "outside_zoning"]);
//! let depth = reduced
//!     .column_by_name("reduced_depth_m").unwrap()
//!     .as_any().downcast_ref::<Float64Array>().unwrap();
//! let tide = reduced
//!     .column_by_name("tide_m").unwrap()
//!     .as_any().downcast_ref::<Float64Array>().unwrap();
//! // Reduced depth = observed depth − tide (both as written, 4 decimals).
//! assert!((depth.value(0) - (4.2 - tide.value(0))).abs() < 1e-9);
//! assert!(depth.is_null(1));
//!
//! // One point and time: the tide there, its uncertainty and zone, or why there is none.
//! match reducer.tide_at(722_430.46, 4_725_456.43, 1_781_431_200.0) {
//!     PointTide::Tide { zone, tide_m, u_tide_m, .. } => {
//!         assert_eq!(zone, "VW1");
//!         assert_eq!(tide_m, tide.value(0));
//!         assert!(u_tide_m.unwrap() > 0.0);
//!     }
//!     other => panic!("{other:?}"),
//! }
//! assert!(matches!(
//!     reducer.tide_at(100_000.0, 100_000.0, 1_781_431_200.0),
//!     PointTide::NoTide { status: "outside_zoning", .. }
//! ));
//! ```
//!
//! Results are for qualified hydrographic review; the responsible authority's specifications,
//! local regulations and licensed practice take precedence.

use std::path::Path;

use arrow_array::RecordBatch;

use crate::io::error::{Finding, IoError};
use crate::io::project::Project;
use crate::run::load::{load, Loaded};
use crate::run::reduce::BatchSetup;

/// Why a project could not be loaded or a batch not reduced.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PipelineError {
    /// The project (or one of its inputs) has errors; every one is listed.
    #[error("the project cannot be loaded: {}", .0.iter().map(|f| f.to_string()).collect::<Vec<_>>().join("; "))]
    Project(Vec<Finding>),
    /// A file or a batch could not be read as its mapping says (a missing column, a column
    /// of the wrong type), or the soundings group does not exist.
    #[error(transparent)]
    Input(#[from] IoError),
}

/// A loaded project and one of its soundings groups, ready to reduce record batches.
pub struct Reducer {
    loaded: Loaded,
    setup: BatchSetup,
}

/// The tide at one point and time ([`Reducer::tide_at`]).
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum PointTide {
    /// A tide: the water level above chart datum, metres, positive up (as written, 4
    /// decimals), its standard uncertainty (with an `[uncertainty]` table) and the zone.
    Tide {
        /// Zone id.
        zone: String,
        /// Tide above chart datum, metres, positive up.
        tide_m: f64,
        /// Its standard uncertainty (1σ), metres.
        u_tide_m: Option<f64>,
        /// How a gap-filled tide was filled; empty for an observed one.
        note: String,
    },
    /// No tide: the status a sounding there would get, the zone if any, and why.
    NoTide {
        /// `outside_zoning`, `no_gauge_data`, `gauge_flagged` or `bad_input`.
        status: &'static str,
        /// The zone, when the point is in one.
        zone: Option<String>,
        /// Why, in the words of `status_detail`.
        why: String,
    },
}

impl Reducer {
    /// Loads the project file at `path` (its gauges, zoning, QC, uncertainty) for soundings
    /// group `group` (0-based, in the file's order).
    pub fn open(path: &Path, group: usize) -> Result<Self, PipelineError> {
        let project = Project::load_all(path)
            .map_err(|e| PipelineError::Project(e.into_iter().map(Finding::from).collect()))?;
        Self::from_project(project, group)
    }

    /// Loads a project given as TOML text, with paths relative to `folder` (the project's
    /// inputs are still read from their files).
    pub fn from_toml(text: &str, folder: &Path, group: usize) -> Result<Self, PipelineError> {
        let project = Project::from_str_all(text, &folder.join("project.toml"))
            .map_err(|e| PipelineError::Project(e.into_iter().map(Finding::from).collect()))?;
        Self::from_project(project, group)
    }

    /// Loads a parsed project for soundings group `group`.
    pub fn from_project(project: Project, group: usize) -> Result<Self, PipelineError> {
        let groups = project.spec.soundings.len();
        if group >= groups {
            return Err(PipelineError::Input(IoError::content(
                crate::io::error::Position::file(&project.path).field("soundings"),
                format!("there is no soundings group {group}: the project has {groups}"),
            )));
        }
        let loaded = load(project, None).map_err(PipelineError::Project)?;
        let setup = BatchSetup::new(&loaded, group)?;
        Ok(Reducer { loaded, setup })
    }

    /// Reduces one batch of soundings (see the module docs for its columns): the batch's
    /// columns followed by the reduction's, one output row per input row, in order. Pure: no
    /// file is read or written, and the same batch gives the same result on any thread.
    pub fn reduce(&self, batch: &RecordBatch) -> Result<RecordBatch, PipelineError> {
        Ok(self.setup.reduce(&self.loaded, batch)?.0)
    }

    /// The `status` column of a reduced batch as words.
    pub fn statuses(&self, reduced: &RecordBatch) -> Option<Vec<String>> {
        use arrow_array::cast::AsArray;
        let a = reduced.column_by_name("status")?;
        let d = a.as_dictionary_opt::<arrow_array::types::Int8Type>()?;
        let words = d.values().as_string_opt::<i32>()?;
        Some(
            d.keys()
                .iter()
                .map(|k| {
                    k.map(|k| words.value(k as usize).to_string())
                        .unwrap_or_default()
                })
                .collect(),
        )
    }

    /// The tide at one point (x, y in the group's CRS) and time (UTC seconds).
    pub fn tide_at(&self, x: f64, y: f64, t_s: f64) -> PointTide {
        let p = self.setup.point(&self.loaded, x, y, t_s);
        match (p.tide_m, p.zone) {
            (Some(tide_m), Some(zone)) => PointTide::Tide {
                zone,
                tide_m,
                u_tide_m: p.u_tide_m,
                note: p.detail,
            },
            (_, zone) => PointTide::NoTide {
                status: p.status.as_str(),
                zone,
                why: p.detail,
            },
        }
    }

    /// The project's chosen survey order (with an `[uncertainty]` table).
    pub fn order(&self) -> Option<&str> {
        self.loaded
            .uncertainty
            .as_ref()
            .map(|u| u.orders[u.chosen].name.as_str())
    }
}
