//! The reduction run: every sounding file of a project streamed through the tide model, in
//! parallel, into `<name>.reduced.csv` files in the output folder.
//!
//! Files are read in chunks of whole lines; a batch of chunks is processed in parallel (rayon)
//! and written in input order, so memory stays bounded whatever the file's size and row order is
//! preserved. Every input line other than the header and blank lines becomes one output row with
//! a status.

use std::fs::File;
use std::path::{Path, PathBuf};

use rayon::prelude::*;
use serde::Serialize;

use super::load::{locator_for_crs, output_clashes, Loaded, PlannedOutput};
use crate::compute::qa::{Judged, QaAccumulator, QaRow};
use crate::compute::reduce::{
    applied_tide_m, reduce_depth, DiscreteZoning, Query, Scratch, SoundingStatus, StatusCounts,
    TideModel, TideOutcome, N_STATUS,
};
use crate::compute::uncertainty::{judge_as_written, u_tvu_m, K95};
use crate::compute::zoning::FeedState;
use crate::io::atomic::{remove_stale_partials, AtomicFile};
use crate::io::columnar::{ReducedColumns, TextColumns, TextKind};
use crate::io::error::{IoError, Position};
use crate::io::numfmt::{push_fixed, round_to, HEIGHT_DECIMALS, UNCERTAINTY_DECIMALS};
use crate::io::parquet_file::{ParquetOut, PROVENANCE_KEY};
use crate::io::project::{Delimiter, SoundingsSpec, TableFormat};
use crate::io::sounding_export::{
    ExportBuf, ExportKind, ExportParts, FAILING_FILE, UNREDUCED_FILE,
};
use crate::io::soundings::{
    lines_of, push_csv_field, Chunk, ChunkReader, Fields, SoundingLayout, SoundingValues,
};
use arrow_array::RecordBatch;
use arrow_schema::SchemaRef;
use std::sync::Arc;

/// Columns ebbwise appends to every input row, in order.
pub const APPENDED_COLUMNS: [&str; 5] = [
    "zone",
    "tide_m",
    "reduced_depth_m",
    "status",
    "status_detail",
];

/// Columns appended after [`APPENDED_COLUMNS`] when uncertainty is computed, in order. All are
/// standard uncertainties (1σ) except `u95_tvu_m` and `allowed_u95_tvu_m` (95 %);
/// `within_order` is `yes` or `no` for the chosen order, judged on `u95_tvu_m` and
/// `allowed_u95_tvu_m` as written (rounded to [`UNCERTAINTY_DECIMALS`]).
pub const UNCERTAINTY_COLUMNS: [&str; 11] = [
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
    "within_order",
];

/// Chunks processed per parallel batch, per worker thread.
const CHUNKS_PER_THREAD: usize = 3;

/// How to run.
#[derive(Clone)]
pub struct ReduceOptions<'a> {
    /// Output folder (created when missing).
    pub out_dir: PathBuf,
    /// Told how far the run has got, when given; the run itself draws nothing.
    pub progress: Option<&'a dyn Progress>,
    /// What to compute and write.
    pub kind: RunKind<'a>,
    /// Only these soundings files (of the project's groups); all when `None`.
    pub only_files: Option<Vec<PathBuf>>,
}

impl std::fmt::Debug for ReduceOptions<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ReduceOptions")
            .field("out_dir", &self.out_dir)
            .field("progress", &self.progress.is_some())
            .field("kind", &self.kind)
            .field("only_files", &self.only_files)
            .finish()
    }
}

/// Receives a run's progress, in bytes of soundings input read. Calls come from the worker
/// threads, hence `Sync`; a caller that shows a bar implements it (the `ebbwise` command does).
pub trait Progress: Sync {
    /// Once, before any soundings file is read: the size of all the run's soundings files.
    fn start(&self, total_bytes: u64);
    /// After each chunk of input has been processed and handed to its writer.
    fn advance(&self, bytes: u64);
    /// Once, when every file has been processed or the run stopped on an error.
    fn finish(&self);
}

/// What a streaming run computes and writes.
#[derive(Debug, Clone, Copy)]
#[non_exhaustive]
pub enum RunKind<'a> {
    /// Reduce with the zoning: `<stem>.reduced.csv`.
    Reduce,
    /// Per-sounding tide correctors with the zoning: `<stem>.correctors.csv`.
    SoundingCorrectors,
    /// Reduce with tide from a correction file (the model, and the file named in details):
    /// `<stem>.applied.csv`.
    Apply(ApplyModel<'a>, &'a Path),
}

/// The tide source of an apply run.
#[derive(Debug, Clone, Copy)]
#[non_exhaustive]
pub enum ApplyModel<'a> {
    /// Per-zone corrector series by zone index, the longest interval bridged per zone index
    /// (seconds) and where those steps come from.
    Zones(
        &'a [Vec<crate::compute::correctors::Corrector>],
        &'a [f64],
        crate::compute::reduce::StepSource,
    ),
    /// Per-sounding corrections.
    Soundings(&'a crate::compute::correctors::SoundingTableModel),
    /// Per-line series.
    Lines(&'a crate::compute::correctors::LineSeriesModel),
}

impl RunKind<'_> {
    fn suffix(&self) -> &'static str {
        match self {
            RunKind::Reduce => "reduced",
            RunKind::SoundingCorrectors => "correctors",
            RunKind::Apply(..) => "applied",
        }
    }
}

pub use crate::io::correctors_file::SOUNDING_CORRECTOR_COLUMNS;

/// One example of a row that was not reduced.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct RowExample {
    /// 1-based line in the input file.
    pub line: u64,
    /// Status word.
    pub status: &'static str,
    /// Why.
    pub detail: String,
}

/// Counts for one input file.
#[derive(Debug, Clone, Serialize)]
pub struct FileSummary {
    /// Input file.
    pub input: PathBuf,
    /// Output file.
    pub output: PathBuf,
    /// Rows per status, in [`SoundingStatus::ALL`] order.
    pub rows_by_status: StatusCounts,
    /// Blank lines (not rows; not written).
    pub blank_lines: u64,
    /// Rows read as soundings (time, position and depth all valid).
    pub parsed_rows: u64,
    /// Of those, rows whose observed depth is negative (above the water surface).
    pub negative_depths: u64,
    /// The first few rows of each status other than `reduced`.
    pub examples: Vec<RowExample>,
    /// Rows per zone and status: `[zone][status]`.
    #[serde(skip)]
    pub per_zone: Vec<[u64; N_STATUS]>,
    /// Smallest and largest sounding time seen, UTC seconds.
    #[serde(skip)]
    pub time_range_s: Option<(f64, f64)>,
    /// QA counts, when uncertainty was computed.
    #[serde(skip)]
    pub qa: Option<QaAccumulator>,
    /// The input's SHA-256 (hex), taken as it was read, when the run makes a QA report.
    #[serde(skip)]
    pub input_sha256: Option<String>,
}

impl FileSummary {
    /// A warning when most observed depths are negative: the sign convention is likely wrong.
    pub fn sign_warning(&self) -> Option<String> {
        (self.parsed_rows > 0 && self.negative_depths * 2 > self.parsed_rows).then(|| {
            format!(
                "{}: {} of {} observed depths are negative (above the water surface): is depth_sign right? (positive_down expects depths positive down)",
                self.input.display(),
                self.negative_depths,
                self.parsed_rows
            )
        })
    }

    /// Total rows written.
    pub fn rows(&self) -> u64 {
        self.rows_by_status.total()
    }
}

/// Per-zone totals for the run summary.
#[derive(Debug, Clone, Serialize)]
pub struct ZoneSummary {
    /// Zone id.
    pub zone: String,
    /// `zone_mean` or `scaled` (which zoning formula was used), or the continuous mode
    /// (`corrector_field`, `astronomical_residual`) when the zone only reports.
    pub mean_level_form: &'static str,
    /// Gauge ids feeding the zone (a continuous tide: the gauges blended across the area).
    pub gauges: Vec<String>,
    /// Soundings reduced in the zone.
    pub reduced: u64,
    /// Soundings in the zone reduced with a tide from filled gauge samples or renormalised feeds.
    pub gap_filled: u64,
    /// Soundings in the zone without gauge data.
    pub no_gauge_data: u64,
    /// Soundings in the zone whose tide would depend on flagged gauge samples.
    pub gauge_flagged: u64,
}

/// What a run did.
#[derive(Debug, Clone, Serialize)]
pub struct RunSummary {
    /// ebbwise version.
    pub ebbwise_version: &'static str,
    /// Project file.
    pub project: PathBuf,
    /// Time interpolation method.
    pub interpolation: &'static str,
    /// The tide model: `zoning` (the zones' correctors), `corrector_field` or
    /// `astronomical_residual` (a continuous tide, `[tide_field]`), or `correction_file` (an
    /// apply run).
    pub tide_model: &'static str,
    /// Whether gauge quality control ran (`[qc] enabled`).
    pub qc_ran: bool,
    /// Rows per status over all files.
    pub rows_by_status: StatusCounts,
    /// Per file.
    pub files: Vec<FileSummary>,
    /// Per zone.
    pub zones: Vec<ZoneSummary>,
    /// Temporaries of an earlier interrupted run that were removed.
    pub stale_partials_removed: usize,
    /// What the user should know about the run's inputs (an apply run: the correction file's
    /// sidecar, provenance and step); omitted when empty.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
    /// Inputs that differ from those a correction file was made with and that were accepted
    /// with `--accept-changed-inputs` (an apply run); omitted when empty.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub accepted_input_differences: Vec<crate::run::provenance::InputDifference>,
    /// QA counts, when uncertainty was computed.
    #[serde(skip)]
    pub qa: Option<QaAccumulator>,
    /// First and last time of every sounding row that could be read (whatever its status), over all
    /// files, UTC seconds.
    #[serde(skip)]
    pub time_range_s: Option<(f64, f64)>,
    /// The GeoJSON exports written (failing, unreduced), with the QA counts.
    #[serde(skip)]
    pub exports: Vec<PathBuf>,
    /// The correction file applied (an apply run).
    #[serde(skip)]
    pub correction_file: Option<PathBuf>,
}

impl RunSummary {
    /// Rows with a status.
    pub fn count(&self, s: SoundingStatus) -> u64 {
        self.rows_by_status.get(s)
    }
    /// All rows.
    pub fn rows(&self) -> u64 {
        self.rows_by_status.total()
    }
}

/// The zone whose outline (in longitude and latitude) holds `(lon, lat)`, when one does.
fn zone_at_lonlat(
    zoning: &crate::io::zoning_geojson::ZoningSpec,
    lon: f64,
    lat: f64,
) -> Option<&str> {
    use geo::Contains;
    if lon.abs() > 180.0 || lat.abs() > 90.0 {
        return None;
    }
    let p = geo::Point::new(lon, lat);
    zoning
        .zones
        .iter()
        .find(|z| z.polygon_lonlat.contains(&p))
        .map(|z| z.id.as_str())
}

struct FileCtx<'a> {
    kind: RunKind<'a>,
    source_name: String,
    /// Uncertainty config when this run computes it.
    unc: Option<&'a super::load::UncertaintyConfig>,
    layout: SoundingLayout,
    zone_ids: Vec<&'a str>,
    gauge_ids: Vec<&'a str>,
    loaded: &'a Loaded,
    group: usize,
    /// Whether failing and unreduced rows go to the GeoJSON exports.
    exporting: bool,
    /// Width of a QA map cell in the group's CRS units.
    map_cell: f64,
    /// The line the QA counts put a row on that names none: the file's name when the file has
    /// no line column, else `(no line in FILE)`.
    no_line: String,
    /// Whether the group's CRS is WGS 84 longitude and latitude.
    lonlat: bool,
    /// Whether the output is columnar (Parquet).
    columnar: bool,
    /// The output's schema, when columnar.
    schema: Option<SchemaRef>,
    /// A Parquet input's GeoParquet geometry column that x and y come from, if any.
    geometry: Option<usize>,
    /// The input's own columns (a Parquet layout names two more when x and y come from a
    /// geometry).
    input_columns: usize,
    /// Whether the QA counts are kept (a file's run with uncertainty; not a pipeline's batch).
    qa: bool,
}

impl FileCtx<'_> {
    /// Builders of the columns appended to each row, for `rows` rows.
    fn reduced_columns(&self, rows: usize) -> ReducedColumns {
        ReducedColumns::new(
            &self.zone_ids,
            &STATUS_WORDS,
            self.unc.is_some(),
            UNCERTAINTY_COLUMNS,
            rows,
        )
    }
}

/// The status words by status index (the `status` column's dictionary).
const STATUS_WORDS: [&str; N_STATUS] = {
    let mut w = [""; N_STATUS];
    let mut i = 0;
    while i < N_STATUS {
        w[i] = SoundingStatus::ALL[i].as_str();
        i += 1;
    }
    w
};

#[derive(Default)]
struct ChunkOut {
    bytes: Vec<u8>,
    /// The rows as typed columns, when the output is columnar.
    batch: Option<RecordBatch>,
    counts: [u64; N_STATUS],
    per_zone: Vec<[u64; N_STATUS]>,
    examples: Vec<RowExample>,
    blank: u64,
    parsed: u64,
    negative: u64,
    t_min: f64,
    t_max: f64,
    qa: Option<QaAccumulator>,
    /// Failing and unreduced rows for the GeoJSON exports (with the QA counts).
    exports: ExportBuf,
}

const EXAMPLES_PER_STATUS: usize = 5;

/// Where a file's rows are written.
enum Sink {
    Csv(AtomicFile),
    Parquet(Box<ParquetOut>),
}

/// One chunk's rows on their way to the writer.
enum Payload {
    Bytes(Vec<u8>),
    Batch(RecordBatch),
}

/// What a Parquet output says of where it comes from (its key-value metadata, under
/// [`PROVENANCE_KEY`]): the run's inputs with their SHA-256, the tide model and the order.
pub(crate) struct Provenance {
    head: serde_json::Map<String, serde_json::Value>,
    inputs: Vec<crate::compute::qa_report::InputFile>,
}

impl Provenance {
    fn of(loaded: &Loaded, kind: RunKind, tide_model: &str) -> Result<Self, IoError> {
        let correction_file = match kind {
            RunKind::Apply(_, p) => Some(p),
            _ => None,
        };
        let inputs = super::provenance::input_files(loaded, &[], correction_file)?;
        let mut head = serde_json::Map::new();
        head.insert("ebbwise_version".into(), env!("CARGO_PKG_VERSION").into());
        head.insert(
            "project_file".into(),
            loaded.project.path.display().to_string().into(),
        );
        head.insert("tide_model".into(), tide_model.into());
        head.insert(
            "order".into(),
            match &loaded.uncertainty {
                Some(u) => u.orders[u.chosen].name.clone().into(),
                None => serde_json::Value::Null,
            },
        );
        head.insert("caution".into(), crate::CAUTION.into());
        Ok(Provenance { head, inputs })
    }

    /// The JSON text, with the soundings file `input` (and its SHA-256 when taken) last.
    fn json_with(&self, input: &Path, sha256: Option<&str>) -> String {
        let mut m = self.head.clone();
        let mut inputs: Vec<serde_json::Value> = self
            .inputs
            .iter()
            .map(|i| serde_json::json!({"role": i.role, "path": i.path, "sha256": i.sha256}))
            .collect();
        inputs.push(serde_json::json!({
            "role": "soundings",
            "path": input.display().to_string(),
            "sha256": sha256,
        }));
        m.insert("inputs".into(), inputs.into());
        serde_json::Value::Object(m).to_string()
    }
}

/// Width of a QA map cell in `crs` units: the zoning's extent there over
/// [`MAP_CELLS_ACROSS`](crate::compute::qa::MAP_CELLS_ACROSS) (its longer side), so that one
/// cell is a few pixels of the report's map.
fn map_cell_width(zoning: &crate::io::zoning_geojson::ZoningSpec, crs: &str) -> f64 {
    use geo::BoundingRect;
    let mut lo = (f64::INFINITY, f64::INFINITY);
    let mut hi = (f64::NEG_INFINITY, f64::NEG_INFINITY);
    let t = crate::io::crs::Transformer::new("EPSG:4326", crs).ok();
    for z in &zoning.zones {
        let Some(r) = z.polygon_lonlat.bounding_rect() else {
            continue;
        };
        for (x, y) in [
            (r.min().x, r.min().y),
            (r.max().x, r.min().y),
            (r.min().x, r.max().y),
            (r.max().x, r.max().y),
        ] {
            if let Some(Ok((px, py))) = t.as_ref().map(|t| t.convert(x, y)) {
                lo = (lo.0.min(px), lo.1.min(py));
                hi = (hi.0.max(px), hi.1.max(py));
            }
        }
    }
    let side = (hi.0 - lo.0).max(hi.1 - lo.1);
    if side.is_finite() && side > 0.0 {
        side / crate::compute::qa::MAP_CELLS_ACROSS
    } else {
        1.0
    }
}

/// Output file name for an input file: `<stem>.reduced.csv` (or `.correctors.csv`,
/// `.applied.csv`).
pub fn output_name(input: &Path, suffix: &str) -> String {
    output_name_as(input, suffix, TableFormat::Csv)
}

/// Output file name for an input file in `format`: `<stem>.reduced.csv`, `<stem>.reduced.parquet`
/// (or `.correctors.…`, `.applied.…`).
pub fn output_name_as(input: &Path, suffix: &str, format: TableFormat) -> String {
    let stem = input
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "soundings".into());
    format!("{stem}.{suffix}.{}", format.extension())
}

/// The format a run of `kind` writes its per-sounding files in: the project's `[output]
/// format`; per-sounding correction files are CSV.
pub fn table_format(project: &crate::io::project::Project, kind: RunKind) -> TableFormat {
    match kind {
        RunKind::SoundingCorrectors => TableFormat::Csv,
        _ => project.spec.output.format,
    }
}

/// Every file a streaming run of `kind` writes into `out_dir` (on all the project's soundings
/// files, or `only_files`): one per soundings file, and the run's summary and reports (for a
/// reduction also the QA report, written or removed), or each per-sounding file's sidecar.
pub fn run_outputs(
    project: &crate::io::project::Project,
    out_dir: &Path,
    kind: RunKind,
    only_files: Option<&[PathBuf]>,
) -> Vec<PlannedOutput> {
    let mut out = Vec::new();
    let what = match kind {
        RunKind::Reduce => "the reduced file",
        RunKind::SoundingCorrectors => "the per-sounding correction file",
        RunKind::Apply(..) => "the applied file",
    };
    for group in &project.spec.soundings {
        for f in &group.files {
            if only_files.is_some_and(|only| !only.iter().any(|o| same_file(o, f))) {
                continue;
            }
            let path = out_dir.join(output_name_as(
                f,
                kind.suffix(),
                table_format(project, kind),
            ));
            out.push(PlannedOutput {
                path: path.clone(),
                what: format!("{what} of {}", f.display()),
            });
            if let RunKind::SoundingCorrectors = kind {
                let mut name = path.file_name().unwrap_or_default().to_os_string();
                name.push(".json");
                out.push(PlannedOutput {
                    path: path.with_file_name(name),
                    what: format!(
                        "the sidecar of the per-sounding correction file of {}",
                        f.display()
                    ),
                });
            }
        }
    }
    let summaries: &[(&str, &str)] = match kind {
        RunKind::Reduce => &[
            ("reduce-summary.json", "the run summary"),
            ("qa-report.json", "the QA report"),
            ("qa-report.html", "the QA report page"),
            (FAILING_FILE, "the failing soundings (GeoJSON)"),
            (UNREDUCED_FILE, "the unreduced soundings (GeoJSON)"),
        ],
        RunKind::SoundingCorrectors => &[],
        RunKind::Apply(..) => &[
            ("apply-summary.json", "the run summary"),
            ("qa-report.json", "the QA report"),
            ("qa-report.html", "the QA report page"),
            (FAILING_FILE, "the failing soundings (GeoJSON)"),
            (UNREDUCED_FILE, "the unreduced soundings (GeoJSON)"),
        ],
    };
    for (name, what) in summaries {
        out.push(PlannedOutput {
            path: out_dir.join(name),
            what: (*what).to_string(),
        });
    }
    out
}

/// Each soundings group's zone locator (in its CRS) and, under a continuous tide, the field's
/// plane there.
pub(crate) struct GroupPlanes {
    pub(crate) locators: Vec<crate::compute::locate::ZoneLocator>,
    pub(crate) planes: Vec<crate::compute::continuous::PlaneField>,
}

impl GroupPlanes {
    /// Built for every group of `loaded`; the planes only when `with_field` (a reduction or
    /// per-sounding correctors, not an apply run) and the project has a continuous tide.
    pub(crate) fn of(loaded: &Loaded, with_field: bool) -> Result<Self, IoError> {
        let at =
            |gi: usize| Position::file(&loaded.project.path).field(format!("soundings[{gi}].crs"));
        let mut locators = Vec::new();
        for (gi, group) in loaded.project.spec.soundings.iter().enumerate() {
            let loc = locator_for_crs(&loaded.zoning, &group.crs)
                .map_err(|m| IoError::content(at(gi), m))?;
            locators.push(loc);
        }
        let mut planes = Vec::new();
        if let (Some(f), true) = (&loaded.field, with_field) {
            for (gi, group) in loaded.project.spec.soundings.iter().enumerate() {
                let pf = crate::run::fields::plane_field(&f.stations, &group.crs)
                    .map_err(|e| IoError::content(at(gi), e.to_string()))?;
                planes.push(pf);
            }
        }
        Ok(GroupPlanes { locators, planes })
    }
}

/// The tide model of a reduction of group `gi`'s soundings: the zoning, or the continuous field
/// (`[tide_field]`).
pub(crate) enum ReductionModel<'a> {
    Zoning(DiscreteZoning<'a>),
    Field(crate::compute::continuous::ContinuousTide<'a>),
}

impl TideModel for ReductionModel<'_> {
    fn tide_at(&self, q: &Query, s: &mut Scratch) -> TideOutcome {
        match self {
            ReductionModel::Zoning(z) => z.tide_at(q, s),
            ReductionModel::Field(f) => f.tide_at(q, s),
        }
    }
}

/// The reduction's tide model for group `gi`, on its locator (and plane).
pub(crate) fn reduction_model<'a>(
    loaded: &'a Loaded,
    gi: usize,
    locators: &'a [crate::compute::locate::ZoneLocator],
    planes: &'a [crate::compute::continuous::PlaneField],
) -> ReductionModel<'a> {
    let renormalise =
        loaded.project.spec.gap_fill.enabled && loaded.project.spec.gap_fill.renormalise_feeds;
    match &loaded.field {
        None => ReductionModel::Zoning(DiscreteZoning {
            zones: &loaded.zones,
            gauges: &loaded.gauges,
            locator: &locators[gi],
            interp: loaded.interp.as_ref(),
            renormalise,
            unc: loaded.uncertainty.as_ref().map(|u| u.gauge_tide_u()),
        }),
        Some(f) => ReductionModel::Field(crate::compute::continuous::ContinuousTide {
            setup: &f.setup,
            plane: &planes[gi],
            gauges: &loaded.gauges,
            locator: &locators[gi],
            interp: loaded.interp.as_ref(),
            renormalise,
            unc: loaded
                .uncertainty
                .as_ref()
                .map(|u| crate::compute::continuous::ContinuousU {
                    gauge_u: &u.gauge_u,
                    rates: &u.gauge_rates,
                }),
        }),
    }
}

/// Reduces every soundings file of a loaded project.
pub fn reduce_project(loaded: &Loaded, opts: &ReduceOptions) -> Result<RunSummary, IoError> {
    if let Some(only) = &opts.only_files {
        for o in only {
            let known = loaded
                .project
                .spec
                .soundings
                .iter()
                .any(|g| g.files.iter().any(|f| same_file(o, f)));
            if !known {
                return Err(IoError::content(
                    Position::file(o),
                    format!(
                        "not a soundings file of project {} (its layout comes from a [[soundings]] group)",
                        loaded.project.path.display()
                    ),
                ));
            }
        }
    }
    let planned = run_outputs(
        &loaded.project,
        &opts.out_dir,
        opts.kind,
        opts.only_files.as_deref(),
    );
    if let Some(clash) = output_clashes(&loaded.project, &planned, &[])
        .into_iter()
        .next()
    {
        return Err(IoError::content(clash.at, clash.message));
    }
    std::fs::create_dir_all(&opts.out_dir).map_err(|e| IoError::file(&opts.out_dir, e))?;
    let stale = remove_stale_partials(&opts.out_dir);
    let mut jobs: Vec<(usize, &SoundingsSpec, &PathBuf, PathBuf)> = Vec::new();
    for (gi, group) in loaded.project.spec.soundings.iter().enumerate() {
        for f in &group.files {
            if let Some(only) = &opts.only_files {
                if !only.iter().any(|o| same_file(o, f)) {
                    continue;
                }
            }
            let out = opts.out_dir.join(output_name_as(
                f,
                opts.kind.suffix(),
                table_format(&loaded.project, opts.kind),
            ));
            jobs.push((gi, group, f, out));
        }
    }
    let GroupPlanes { locators, planes } = GroupPlanes::of(
        loaded,
        matches!(opts.kind, RunKind::Reduce | RunKind::SoundingCorrectors),
    )?;
    let total_bytes: u64 = jobs
        .iter()
        .map(|(_, _, f, _)| std::fs::metadata(f).map(|m| m.len()).unwrap_or(0))
        .sum();
    if let Some(p) = opts.progress {
        p.start(total_bytes);
    }
    let inputs: Vec<&Path> = loaded
        .project
        .spec
        .soundings
        .iter()
        .flat_map(|g| g.files.iter().map(PathBuf::as_path))
        .chain(std::iter::once(loaded.project.path.as_path()))
        .chain(
            loaded
                .project
                .spec
                .gauges
                .iter()
                .map(|g| g.record.as_path()),
        )
        .chain(std::iter::once(loaded.project.spec.zoning.as_path()))
        .collect();
    let tide_model_name = match (&loaded.field, opts.kind) {
        (_, RunKind::Apply(..)) => "correction_file",
        (Some(f), _) => f.setup.mode.as_str(),
        (None, _) => "zoning",
    };
    let provenance = match table_format(&loaded.project, opts.kind) {
        TableFormat::Parquet => Some(Provenance::of(loaded, opts.kind, tide_model_name)?),
        TableFormat::Csv => None,
    };
    // With the QA counts, the failing and unreduced soundings are exported as GeoJSON.
    let exporting = loaded.project.spec.output.geojson_exports
        && loaded.uncertainty.is_some()
        && !matches!(opts.kind, RunKind::SoundingCorrectors);
    let files: Result<Vec<FileSummary>, IoError> = jobs
        .par_iter()
        .enumerate()
        .map(|(k, (gi, group, input, out))| {
            let parts = if exporting {
                Some(ExportParts::create(&opts.out_dir, k)?)
            } else {
                None
            };
            let series_model;
            let located;
            let reduction;
            let model: &dyn TideModel = match opts.kind {
                RunKind::Reduce | RunKind::SoundingCorrectors => {
                    reduction = reduction_model(loaded, *gi, &locators, &planes);
                    &reduction
                }
                RunKind::Apply(ApplyModel::Zones(series, step_s, step_from), _) => {
                    series_model = crate::compute::correctors::ZoneSeriesModel {
                        locator: &locators[*gi],
                        series,
                        step_s,
                        step_from,
                    };
                    &series_model
                }
                RunKind::Apply(ApplyModel::Soundings(table), _) => table,
                RunKind::Apply(ApplyModel::Lines(lines), _) => {
                    located = crate::compute::correctors::LocatedFirst {
                        locator: &locators[*gi],
                        inner: lines,
                    };
                    &located
                }
            };
            reduce_file(
                loaded,
                opts.kind,
                *gi,
                group,
                input,
                out,
                model,
                &inputs,
                opts.progress,
                parts,
                provenance.as_ref(),
            )
        })
        .collect();
    if let Some(p) = opts.progress {
        p.finish();
    }
    let mut files = match files {
        Ok(f) => f,
        Err(e) => {
            crate::io::sounding_export::remove_parts(&opts.out_dir, jobs.len());
            return Err(e);
        }
    };
    let exports = if exporting {
        crate::io::sounding_export::join_parts(
            &opts.out_dir,
            jobs.len(),
            &loaded.project.spec.name,
        )?
        .to_vec()
    } else {
        Vec::new()
    };
    let mut totals = [0u64; N_STATUS];
    let mut per_zone = vec![[0u64; N_STATUS]; loaded.zones.len()];
    let mut qa: Option<QaAccumulator> = None;
    let mut time_range_s: Option<(f64, f64)> = None;
    for f in &mut files {
        if let Some(q) = f.qa.take() {
            match &mut qa {
                None => qa = Some(q),
                Some(acc) => acc.merge(q),
            }
        }
        if let Some((a, b)) = f.time_range_s {
            time_range_s = Some(match time_range_s {
                None => (a, b),
                Some((x, y)) => (x.min(a), y.max(b)),
            });
        }
        add_counts(&mut totals, &f.rows_by_status.0);
        for (acc, c) in per_zone.iter_mut().zip(&f.per_zone) {
            add_counts(acc, c);
        }
    }
    let zones = loaded
        .zones
        .iter()
        .zip(&per_zone)
        .map(|(z, c)| ZoneSummary {
            zone: z.id.clone(),
            mean_level_form: match (&loaded.field, opts.kind) {
                (Some(f), RunKind::Reduce | RunKind::SoundingCorrectors) => f.setup.mode.as_str(),
                _ => z.mean_level.label(),
            },
            gauges: match (&loaded.field, opts.kind) {
                (Some(f), RunKind::Reduce | RunKind::SoundingCorrectors) => f
                    .setup
                    .blend_gauges
                    .iter()
                    .map(|(g, _)| loaded.gauges[*g].id.clone())
                    .collect(),
                _ => z
                    .feeds
                    .iter()
                    .map(|f| loaded.gauges[f.gauge].id.clone())
                    .collect(),
            },
            reduced: c[SoundingStatus::Reduced.index()],
            gap_filled: c[SoundingStatus::GapFilled.index()],
            no_gauge_data: c[SoundingStatus::NoGaugeData.index()],
            gauge_flagged: c[SoundingStatus::GaugeFlagged.index()],
        })
        .collect();
    Ok(RunSummary {
        ebbwise_version: env!("CARGO_PKG_VERSION"),
        project: loaded.project.path.clone(),
        qc_ran: loaded.project.spec.qc.enabled,
        interpolation: loaded.interp.name(),
        tide_model: tide_model_name,
        rows_by_status: StatusCounts(totals),
        files,
        zones,
        stale_partials_removed: stale,
        warnings: Vec::new(),
        accepted_input_differences: Vec::new(),
        qa,
        time_range_s,
        exports,
        correction_file: match opts.kind {
            RunKind::Apply(_, path) => Some(path.to_path_buf()),
            _ => None,
        },
    })
}

/// Whether two paths name the same file.
pub fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

/// Where a file's rows come from, for the three stages of [`stream_file`]: CSV text in chunks
/// of lines, or a Parquet file in record batches.
trait RowSource: Send {
    type Item: Send + Sync;
    /// The next item, `None` at the end.
    fn next_item(&mut self) -> Result<Option<Self::Item>, IoError>;
    /// Takes back an item the workers are done with (a chunk's buffer is reused).
    fn reuse(&mut self, _item: Self::Item) {}
    /// Bytes of input an item stands for (the progress).
    fn item_bytes(item: &Self::Item) -> u64;
    /// The input's SHA-256 after the last item, when it is hashed.
    fn finish(self) -> Result<Option<String>, IoError>;
}

struct CsvSource {
    path: PathBuf,
    reader: ChunkReader<crate::io::soundings::HashingReader<File>>,
    first: Option<Chunk>,
    spare: Vec<Vec<u8>>,
}

impl RowSource for CsvSource {
    type Item = Chunk;
    fn next_item(&mut self) -> Result<Option<Chunk>, IoError> {
        if let Some(c) = self.first.take() {
            return Ok(Some(c));
        }
        let buf = self.spare.pop().unwrap_or_default();
        self.reader
            .next_chunk(buf)
            .map_err(|e| IoError::file(&self.path, e))
    }
    fn reuse(&mut self, item: Chunk) {
        self.spare.push(item.data);
    }
    fn item_bytes(item: &Chunk) -> u64 {
        item.data.len() as u64
    }
    fn finish(self) -> Result<Option<String>, IoError> {
        Ok(self.reader.into_inner().sha256_hex())
    }
}

/// A record batch of a Parquet soundings file and the 1-based row number of its first row.
struct RowBatch {
    first_row: u64,
    batch: RecordBatch,
    /// The share of the file's bytes its rows stand for (the progress).
    bytes: u64,
}

struct ParquetSource {
    path: PathBuf,
    reader: crate::io::parquet_file::ParquetSoundings,
    next_row: u64,
    bytes_per_row: f64,
    hash: bool,
}

impl RowSource for ParquetSource {
    type Item = RowBatch;
    fn next_item(&mut self) -> Result<Option<RowBatch>, IoError> {
        Ok(self.reader.next_batch()?.map(|batch| {
            let first_row = self.next_row;
            self.next_row += batch.num_rows() as u64;
            let bytes = (batch.num_rows() as f64 * self.bytes_per_row) as u64;
            RowBatch {
                first_row,
                batch,
                bytes,
            }
        }))
    }
    fn item_bytes(item: &RowBatch) -> u64 {
        item.bytes
    }
    fn finish(self) -> Result<Option<String>, IoError> {
        // The reader seeks about the file; its hash is taken in one more read.
        if self.hash {
            crate::io::correctors_file::sha256_file(&self.path).map(Some)
        } else {
            Ok(None)
        }
    }
}

/// A Parquet soundings file's column names for the layout, and the GeoParquet geometry
/// column x and y are read from: when the file has one and the group's `x` and `y` name no
/// column of the file, two names `<geometry>.x` and `<geometry>.y` follow the file's own, and
/// the returned mapping points x and y at them.
pub(crate) fn parquet_layout(
    group: &SoundingsSpec,
    src: &crate::io::parquet_file::ParquetSoundings,
    naive_offset: Option<chrono::FixedOffset>,
    input: &Path,
) -> Result<(SoundingLayout, Option<usize>), IoError> {
    let mut names = src.names();
    let mut spec = group.clone();
    let mut geometry = None;
    let named = |c: &str| c.starts_with('#') || names.iter().any(|n| n == c);
    if let Some(g) = src.geometry() {
        if !named(&group.columns.x) && !named(&group.columns.y) {
            match &g.crs {
                Some(c) if crate::io::crs::same_crs_name(c, &group.crs) => {}
                found => {
                    return Err(IoError::content(
                        Position::file(input).field(g.name.as_str()),
                        format!(
                            "the GeoParquet geometry's CRS is {} but the group's crs is {}: positions would be read in the wrong CRS",
                            found.as_deref().unwrap_or("not given by an id"),
                            group.crs
                        ),
                    ));
                }
            }
            let (xn, yn) = (format!("{}.x", g.name), format!("{}.y", g.name));
            spec.columns.x = xn.clone();
            spec.columns.y = yn.clone();
            names.push(xn);
            names.push(yn);
            geometry = Some(g.index);
        }
    }
    let layout = SoundingLayout::from_names(&spec, names, naive_offset, input)?;
    // Only x and y may be the geometry's; every other mapping names a column of the file.
    let own = src.schema().fields().len();
    let m = layout.mapped_columns();
    for (key, i) in [
        ("time", Some(m.time)),
        ("depth", Some(m.depth)),
        ("line", m.line),
        ("u_depth", m.u_depth),
    ] {
        if let Some(i) = i.filter(|&i| i >= own) {
            return Err(IoError::content(
                Position::file(input).field(format!("columns.{key}")),
                format!(
                    "'{}' is not a column of the file (it has {own}): only x and y can come from the geometry",
                    layout.column_names[i]
                ),
            ));
        }
    }
    if let Some(g) = geometry {
        let t = src.schema().field(g).data_type().clone();
        if !matches!(
            t,
            arrow_schema::DataType::Binary | arrow_schema::DataType::LargeBinary
        ) {
            return Err(IoError::content(
                Position::file(input).field(src.schema().field(g).name().as_str()),
                format!(
                    "the GeoParquet geometry column is {t}; ebbwise reads WKB in a binary column"
                ),
            ));
        }
    }
    // The mapped columns' types, checked once for the file (not per batch).
    let empty = RecordBatch::new_empty(Arc::clone(src.schema()));
    crate::io::columnar::BatchView::new(
        &empty,
        &layout.mapped_columns(),
        &layout.column_names,
        geometry,
        naive_offset.map(|o| -f64::from(o.local_minus_utc())),
        layout.time_is_unix_s(),
    )
    .map_err(|p| IoError::content(Position::file(input).field(p.column), p.message))?;
    Ok((layout, geometry))
}

#[allow(clippy::too_many_arguments)]
fn reduce_file(
    loaded: &Loaded,
    kind: RunKind,
    group_index: usize,
    group: &SoundingsSpec,
    input: &Path,
    out: &Path,
    model: &dyn TideModel,
    inputs: &[&Path],
    progress: Option<&dyn Progress>,
    parts: Option<ExportParts>,
    provenance: Option<&Provenance>,
) -> Result<FileSummary, IoError> {
    // The QA report's provenance gives every soundings file's SHA-256, and so does a Parquet
    // output's: taken as it is read.
    let hash_input = (loaded.uncertainty.is_some() || provenance.is_some())
        && !matches!(kind, RunKind::SoundingCorrectors);
    let source_name = input
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let file_ctx = |layout: SoundingLayout| FileCtx {
        kind,
        no_line: if layout.has_line_column() {
            format!("(no line in {source_name})")
        } else {
            source_name.clone()
        },
        source_name: source_name.clone(),
        unc: loaded.uncertainty.as_ref(),
        layout,
        zone_ids: loaded.zones.iter().map(|z| z.id.as_str()).collect(),
        gauge_ids: loaded.gauges.iter().map(|g| g.id.as_str()).collect(),
        loaded,
        group: group_index,
        map_cell: map_cell_width(&loaded.zoning, &group.crs),
        exporting: parts.is_some(),
        lonlat: crate::io::crs::is_wgs84_lonlat(&group.crs),
        columnar: provenance.is_some(),
        schema: None,
        geometry: None,
        input_columns: 0,
        qa: true,
    };
    if crate::io::parquet_file::is_parquet(input) {
        if matches!(kind, RunKind::SoundingCorrectors) {
            return Err(IoError::content(
                Position::file(input),
                "per-sounding correction files are made from CSV soundings files only; reduce a Parquet file with `ebbwise reduce`",
            ));
        }
        let src = crate::io::parquet_file::ParquetSoundings::open(
            input,
            crate::io::parquet_file::READ_BATCH_ROWS,
        )?;
        let (layout, geometry) = parquet_layout(group, &src, loaded.project.naive_offset, input)?;
        let mut ctx = file_ctx(layout);
        if !ctx.columnar {
            let empty = RecordBatch::new_empty(Arc::clone(src.schema()));
            crate::io::columnar::RowText::new(&empty)
                .map_err(|p| IoError::content(Position::file(input).field(p.column), p.message))?;
        }
        ctx.geometry = geometry;
        ctx.input_columns = src.schema().fields().len();
        let input_fields: Vec<arrow_schema::Field> = src
            .schema()
            .fields()
            .iter()
            .map(|f| f.as_ref().clone())
            .collect();
        let file_bytes = std::fs::metadata(input).map(|m| m.len()).unwrap_or(0);
        let rows = src.rows().max(1);
        let source = ParquetSource {
            path: input.to_path_buf(),
            reader: src,
            next_row: 1,
            bytes_per_row: file_bytes as f64 / rows as f64,
            hash: hash_input,
        };
        let sink = open_sink(&mut ctx, out, inputs, input_fields)?;
        let ctx = ctx;
        stream_file(
            &ctx,
            source,
            sink,
            |b: &RowBatch, buf| process_batch(b, &ctx, model, buf),
            input,
            out,
            progress,
            parts,
            provenance,
        )
    } else {
        let file = File::open(input).map_err(|e| IoError::file(input, e))?;
        let mut reader = ChunkReader::new(
            crate::io::soundings::HashingReader::new(file, hash_input),
            1,
        );
        let first = reader
            .next_chunk(Vec::new())
            .map_err(|e| IoError::file(input, e))?;
        let Some(mut first) = first else {
            return Err(IoError::content(Position::file(input), "the file is empty"));
        };
        let first_line_text: Option<String> = lines_of(&first)
            .next()
            .map(|(_, l)| String::from_utf8_lossy(l).into_owned());
        let layout = SoundingLayout::resolve(
            group,
            first_line_text.as_deref(),
            loaded.project.naive_offset,
            input,
        )?;
        let mut ctx = file_ctx(layout);
        ctx.input_columns = ctx.layout.column_names.len();
        let input_fields = TextColumns::new(&ctx.layout.column_names, &ctx.layout.text_kinds(), 0)
            .fields()
            .to_vec();
        let sink = open_sink(&mut ctx, out, inputs, input_fields)?;
        let ctx = ctx;
        if group.header {
            // Drop the header line from the first chunk.
            let cut = first
                .data
                .iter()
                .position(|&c| c == b'\n')
                .map(|i| i + 1)
                .unwrap_or(first.data.len());
            first.data.drain(..cut);
            first.first_line += 1;
            if let Some(p) = progress {
                p.advance(cut as u64);
            }
        }
        let source = CsvSource {
            path: input.to_path_buf(),
            reader,
            first: Some(first),
            spare: Vec::new(),
        };
        stream_file(
            &ctx,
            source,
            sink,
            |c: &Chunk, buf| process_chunk(c, &ctx, model, buf),
            input,
            out,
            progress,
            parts,
            provenance,
        )
    }
}

/// Opens a file's output: a Parquet file whose columns are `input_fields` and the appended
/// ones (the schema kept in `ctx`), or a CSV file with its header written.
fn open_sink(
    ctx: &mut FileCtx,
    out: &Path,
    inputs: &[&Path],
    input_fields: Vec<arrow_schema::Field>,
) -> Result<Sink, IoError> {
    if ctx.columnar {
        let mut fields = input_fields;
        fields.extend(ctx.reduced_columns(0).fields());
        let schema: SchemaRef = Arc::new(arrow_schema::Schema::new(fields));
        ctx.schema = Some(Arc::clone(&schema));
        return Ok(Sink::Parquet(Box::new(ParquetOut::create(
            out, inputs, schema,
        )?)));
    }
    let mut f = AtomicFile::create(out, inputs)?;
    let mut header = Vec::new();
    if let RunKind::SoundingCorrectors = ctx.kind {
        header.extend_from_slice(SOUNDING_CORRECTOR_COLUMNS.join(",").as_bytes());
    } else {
        for (i, name) in ctx.layout.column_names[..ctx.input_columns]
            .iter()
            .enumerate()
        {
            if i > 0 {
                header.push(b',');
            }
            push_csv_field(&mut header, name);
        }
        for c in APPENDED_COLUMNS {
            header.push(b',');
            header.extend_from_slice(c.as_bytes());
        }
        if ctx.unc.is_some() {
            for c in UNCERTAINTY_COLUMNS {
                header.push(b',');
                header.extend_from_slice(c.as_bytes());
            }
        }
    }
    header.push(b'\n');
    f.write_all(&header)?;
    Ok(Sink::Csv(f))
}

/// Streams a file's rows through three overlapping stages: a reader thread takes items from
/// `source`, the rayon pool processes a batch of items (`process`), a writer thread writes the
/// previous batch's output. Channels are bounded, so memory stays bounded whatever the file's
/// size; output order is input order. Then commits the output.
#[allow(clippy::too_many_arguments)]
fn stream_file<S: RowSource>(
    ctx: &FileCtx,
    mut source: S,
    mut sink: Sink,
    process: impl Fn(&S::Item, Vec<u8>) -> ChunkOut + Sync,
    input: &Path,
    out: &Path,
    progress: Option<&dyn Progress>,
    mut parts: Option<ExportParts>,
    provenance: Option<&Provenance>,
) -> Result<FileSummary, IoError> {
    let mut summary = FileSummary {
        input: input.to_path_buf(),
        output: out.to_path_buf(),
        rows_by_status: StatusCounts::default(),
        blank_lines: 0,
        parsed_rows: 0,
        negative_depths: 0,
        examples: Vec::new(),
        per_zone: vec![[0; N_STATUS]; ctx.zone_ids.len()],
        time_range_s: None,
        qa: None,
        input_sha256: None,
    };
    let mut counts = [0u64; N_STATUS];
    let batch = CHUNKS_PER_THREAD * rayon::current_num_threads().max(1);
    let (item_tx, item_rx) = std::sync::mpsc::sync_channel::<Result<S::Item, IoError>>(batch);
    let (out_tx, out_rx) = std::sync::mpsc::sync_channel::<Payload>(batch);
    let (used_tx, used_rx) = std::sync::mpsc::channel::<Vec<u8>>();
    let (spare_tx, spare_rx) = std::sync::mpsc::channel::<S::Item>();
    let mut input_sha256: Option<String> = None;
    let written: Result<Sink, IoError> = std::thread::scope(|scope| {
        // The reader gives the file's SHA-256 when it has read it all.
        let hashed = scope.spawn(move || -> Result<Option<String>, IoError> {
            loop {
                while let Ok(it) = spare_rx.try_recv() {
                    source.reuse(it);
                }
                match source.next_item() {
                    Ok(Some(c)) => {
                        if item_tx.send(Ok(c)).is_err() {
                            return Ok(None);
                        }
                    }
                    Ok(None) => return source.finish(),
                    Err(e) => {
                        let _ = item_tx.send(Err(e));
                        return Ok(None);
                    }
                }
            }
        });
        let writer = scope.spawn(move || -> Result<Sink, IoError> {
            for payload in out_rx {
                match (&mut sink, payload) {
                    (Sink::Csv(f), Payload::Bytes(bytes)) => {
                        f.write_all(&bytes)?;
                        let _ = used_tx.send(bytes);
                    }
                    (Sink::Parquet(p), Payload::Batch(b)) => p.write(&b)?,
                    _ => unreachable!("a chunk's output is in the file's format"),
                }
            }
            Ok(sink)
        });
        let mut pending: Vec<S::Item> = Vec::with_capacity(batch);
        let mut done = false;
        let mut read_error = None;
        let mut export_error = None;
        while !done {
            while pending.len() < batch {
                match item_rx.recv() {
                    Ok(Ok(c)) => pending.push(c),
                    Ok(Err(e)) => {
                        read_error = Some(e);
                        done = true;
                        break;
                    }
                    Err(_) => {
                        done = true;
                        break;
                    }
                }
            }
            if read_error.is_some() {
                break;
            }
            let buffers: Vec<Vec<u8>> = (0..pending.len())
                .map(|_| used_rx.try_recv().unwrap_or_default())
                .collect();
            let outs: Vec<ChunkOut> = pending
                .par_iter()
                .zip(buffers)
                .map(|(c, buf)| process(c, buf))
                .collect();
            for (c, o) in pending.drain(..).zip(outs) {
                let payload = match o.batch {
                    Some(b) => Payload::Batch(b),
                    None => Payload::Bytes(o.bytes),
                };
                if out_tx.send(payload).is_err() {
                    // The writer stopped on an error: it is reported below.
                    done = true;
                    break;
                }
                if let Some(p) = progress {
                    p.advance(S::item_bytes(&c));
                }
                let _ = spare_tx.send(c);
                add_counts(&mut counts, &o.counts);
                for (acc, zc) in summary.per_zone.iter_mut().zip(&o.per_zone) {
                    add_counts(acc, zc);
                }
                summary.blank_lines += o.blank;
                summary.parsed_rows += o.parsed;
                summary.negative_depths += o.negative;
                for ex in o.examples {
                    let same = summary
                        .examples
                        .iter()
                        .filter(|e| e.status == ex.status)
                        .count();
                    if same < EXAMPLES_PER_STATUS {
                        summary.examples.push(ex);
                    }
                }
                if let Some(p) = parts.as_mut() {
                    if let Err(e) = p.write(&o.exports) {
                        export_error = Some(e);
                        done = true;
                        break;
                    }
                }
                if let Some(q) = o.qa {
                    match &mut summary.qa {
                        None => summary.qa = Some(q),
                        Some(acc) => acc.merge(q),
                    }
                }
                if o.t_min <= o.t_max {
                    summary.time_range_s = Some(match summary.time_range_s {
                        None => (o.t_min, o.t_max),
                        Some((a, b)) => (a.min(o.t_min), b.max(o.t_max)),
                    });
                }
            }
        }
        drop(out_tx);
        drop(item_rx);
        let sink = writer.join().expect("writer thread does not panic")?;
        let hash = hashed.join().expect("reader thread does not panic");
        match read_error.or(export_error) {
            Some(e) => Err(e),
            None => {
                input_sha256 = hash?;
                Ok(sink)
            }
        }
    });
    let sink = written?;
    if let Some(p) = parts {
        p.finish()?;
    }
    match sink {
        Sink::Csv(f) => {
            f.commit()?;
        }
        Sink::Parquet(p) => {
            let prov = provenance.expect("a Parquet output has its provenance");
            p.commit(&[(
                PROVENANCE_KEY.to_string(),
                prov.json_with(input, input_sha256.as_deref()),
            )])?;
        }
    }
    summary.rows_by_status = StatusCounts(counts);
    summary.input_sha256 = input_sha256;
    Ok(summary)
}

/// A batch of a Parquet soundings file's rows, as [`process_chunk`] does a chunk of CSV lines:
/// the file's own columns pass through as they are (Parquet output) or as text (CSV output).
fn process_batch(rb: &RowBatch, ctx: &FileCtx, model: &dyn TideModel, bytes: Vec<u8>) -> ChunkOut {
    let batch = &rb.batch;
    let rows = batch.num_rows();
    let mut o = ChunkOut::start(ctx, bytes, rows * 64);
    let m = ctx.layout.mapped_columns();
    let naive = ctx
        .layout
        .naive_offset()
        .map(|off| -f64::from(off.local_minus_utc()));
    let view = crate::io::columnar::BatchView::new(
        batch,
        &m,
        &ctx.layout.column_names,
        ctx.geometry,
        naive,
        ctx.layout.time_is_unix_s(),
    );
    let mut reduced = ctx.schema.as_ref().map(|_| ctx.reduced_columns(rows));
    // Checked when the file was opened (every batch has the file's schema).
    let text = if ctx.columnar {
        None
    } else {
        crate::io::columnar::RowText::new(batch).ok()
    };
    let mut w = RowWork::default();
    for r in 0..rows {
        let line_no = rb.first_row + r as u64;
        w.detail.clear();
        let mut facts = RowFacts {
            line: &ctx.no_line,
            t_s: None,
            at: None,
        };
        let parsed = match &view {
            Err(p) => {
                // Checked when the file was opened; kept for a batch that differs.
                note_problem(&mut w.detail, &p.column, &p.message);
                None
            }
            Ok(v) => match v
                .row(r, &m, &ctx.layout)
                .and_then(|raw| ctx.layout.check(raw, |i| v.written(i, r)))
            {
                Ok(values) => Some(values),
                Err(p) => {
                    if let Some(l) = v.line_text(r).filter(|l| !l.is_empty()) {
                        facts.line = l;
                    }
                    facts.at = v.position(r);
                    note_problem(&mut w.detail, &p.field, &p.message);
                    None
                }
            },
        };
        let ev = row_outcome(ctx, model, parsed.as_ref(), &mut facts, &mut o, &mut w);
        match (reduced.as_mut(), text.as_ref()) {
            (Some(red), _) => red.push(
                ev.zone,
                ev.tide,
                ev.status.index(),
                &w.detail,
                ev.unc_cols.as_ref(),
            ),
            (None, Some(t)) => {
                t.push_row(&mut o.bytes, r);
                write_reduced_tail(&mut o.bytes, ctx, &ev, &w.detail);
            }
            (None, None) => unreachable!("a file's columns have text forms, checked on opening"),
        }
        account(&mut o, ctx, line_no, &facts, &ev, &w);
    }
    if let (Some(mut red), Some(schema)) = (reduced, &ctx.schema) {
        let mut arrays: Vec<arrow_array::ArrayRef> = batch.columns().to_vec();
        arrays.extend(red.finish());
        o.batch = Some(
            RecordBatch::try_new(Arc::clone(schema), arrays)
                .expect("the columns are built to the file's schema"),
        );
    }
    if let Some(q) = o.qa.as_mut() {
        q.set_file(&ctx.source_name);
    }
    o
}

/// Appends zone, tide, reduced depth, status, detail (and the uncertainty columns when this run
/// computes them) to a reduced-output row, and ends the row.
fn write_reduced_tail(b: &mut Vec<u8>, ctx: &FileCtx, ev: &RowEval, detail: &str) {
    b.push(b',');
    if let Some(z) = ev.zone {
        push_csv_field(b, ctx.zone_ids[z]);
    }
    b.push(b',');
    if let Some((t, d)) = ev.tide {
        push_fixed(b, t, HEIGHT_DECIMALS);
        b.push(b',');
        push_fixed(b, d, HEIGHT_DECIMALS);
    } else {
        b.push(b',');
    }
    b.push(b',');
    b.extend_from_slice(ev.status.as_str().as_bytes());
    b.push(b',');
    push_csv_field(b, detail);
    if ctx.unc.is_some() {
        match ev.unc_cols {
            Some((vals, within)) => {
                for x in vals {
                    b.push(b',');
                    push_fixed(b, x, UNCERTAINTY_DECIMALS);
                }
                b.extend_from_slice(if within { b",yes" } else { b",no" });
            }
            None => b.extend_from_slice(b",,,,,,,,,,,"),
        }
    }
    b.push(b'\n');
}

/// Writes one row of a per-sounding correction file: `key` is the row's (time, line) when it
/// could be read.
#[allow(clippy::too_many_arguments)]
fn write_corrector_row(
    b: &mut Vec<u8>,
    ctx: &FileCtx,
    line_no: u64,
    fields: &Fields,
    line: &str,
    key: Option<(f64, &str)>,
    ev: &RowEval,
    fill_detail: &str,
) {
    use std::io::Write;
    // line, time: parsed when the row could be read, else the raw fields (or empty).
    match key {
        Some((t, l)) => {
            push_csv_field(b, l);
            b.push(b',');
            crate::io::timefmt::push_utc_bytes(b, t);
        }
        None => {
            let raw_line = ctx
                .layout
                .line_column()
                .and_then(|i| fields.get(line, i))
                .unwrap_or("");
            push_csv_field(b, raw_line);
            b.push(b',');
        }
    }
    b.push(b',');
    push_csv_field(b, &ctx.source_name);
    let _ = write!(b, ",{line_no},");
    if let Some(z) = ev.zone {
        push_csv_field(b, ctx.zone_ids[z]);
    }
    b.push(b',');
    if let Some((t, _)) = ev.tide {
        push_fixed(b, t, HEIGHT_DECIMALS);
    }
    b.push(b',');
    if let Some((vals, _)) = ev.unc_cols {
        push_fixed(b, vals[5], UNCERTAINTY_DECIMALS);
    }
    b.push(b',');
    b.extend_from_slice(ev.status.as_str().as_bytes());
    match ev.unc_cols {
        Some((vals, _)) => {
            for x in &vals[..5] {
                b.push(b',');
                push_fixed(b, *x, UNCERTAINTY_DECIMALS);
            }
        }
        None => b.extend_from_slice(b",,,,,"),
    }
    b.push(b',');
    push_csv_field(b, fill_detail);
    b.push(b'\n');
}

fn add_counts(acc: &mut [u64; N_STATUS], add: &[u64; N_STATUS]) {
    for (a, b) in acc.iter_mut().zip(add) {
        *a += b;
    }
}

fn write_input_fields(out: &mut Vec<u8>, line: &str, fields: &Fields, ctx: &FileCtx, n: usize) {
    let fast = ctx.layout.delimiter == Delimiter::Comma && fields.len() == n && !line.contains('"');
    if fast {
        out.extend_from_slice(line.as_bytes());
        return;
    }
    for i in 0..n {
        if i > 0 {
            out.push(b',');
        }
        if let Some(f) = fields.get(line, i) {
            push_csv_field(out, f);
        }
    }
}

/// The words of each filled gap, made once per run and thread (formatting two times per
/// gap-filled sounding would cost more than its tide).
#[derive(Debug, Default)]
pub(crate) struct FillLabels(Vec<(usize, u64, String)>);

impl FillLabels {
    /// "gauge 'x' level filled by … across … to …" for span `sp` of gauge `gi`.
    fn of(
        &mut self,
        gauges: &[crate::compute::zoning::Gauge],
        gi: usize,
        sp: &crate::compute::gapfill::FillSpan,
    ) -> &str {
        let key = (gi, sp.from_s.to_bits());
        let k = match self.0.iter().position(|(g, f, _)| (*g, *f) == key) {
            Some(k) => k,
            None => {
                let text = format!(
                    "gauge '{}' level filled by {}{} across {} to {}",
                    gauges[gi].id,
                    sp.method.as_str(),
                    sp.neighbour
                        .map(|j| format!(" from gauge '{}'", gauges[j].id))
                        .unwrap_or_default(),
                    crate::io::timefmt::utc_label(sp.from_s),
                    crate::io::timefmt::utc_label(sp.to_s)
                );
                self.0.push((key.0, key.1, text));
                self.0.len() - 1
            }
        };
        &self.0[k].2
    }
}

/// Whether a tide that used the gauge states `states` (whatever model found it) rests on
/// gap-filled samples or on renormalised feeds
/// ([`crate::compute::correctors::rests_on_filled`]); if so, says how in `detail` (the gauge,
/// the method and the filled gap; or the feed left out), one part per gauge state in order,
/// joined by `; `. The words name the filled gap and the feeds, not the instant, so that a
/// correction file's row can carry them to the soundings its tide reaches.
pub(crate) fn gap_filled_detail(
    gauges: &[crate::compute::zoning::Gauge],
    states: &[FeedState],
    detail: &mut String,
    labels: &mut FillLabels,
) -> bool {
    use std::fmt::Write;
    let mut any = false;
    for st in states {
        let g = &gauges[st.gauge];
        if st.missing {
            if any {
                detail.push_str("; ");
            }
            let present: Vec<&str> = states
                .iter()
                .filter(|s| !s.missing)
                .map(|s| gauges[s.gauge].id.as_str())
                .collect();
            let _ = write!(
                detail,
                "{}{}' has no level: tide from {} with weights renormalised",
                crate::compute::correctors::RENORMALISED_PART_PREFIX,
                g.id,
                present.join(", ")
            );
            any = true;
            continue;
        }
        if !g.series.fill.bracket_filled(st.level.bracket) {
            continue;
        }
        if any {
            detail.push_str("; ");
        }
        match g.series.fill.span_at(st.at_s) {
            Some(sp) => detail.push_str(labels.of(gauges, st.gauge, sp)),
            None => {
                let _ = write!(detail, "gauge '{}' level filled", g.id);
            }
        }
        any = true;
    }
    any
}

/// A worker's scratch space for its rows, reused from row to row.
#[derive(Default)]
struct RowWork {
    scratch: Scratch,
    labels: FillLabels,
    /// The row's `status_detail`.
    detail: String,
    /// The row's verdict per order (with uncertainty).
    within: Vec<bool>,
}

/// What the reduction made of one row, before it is written and counted.
#[derive(Debug, Clone, Copy)]
struct RowEval {
    status: SoundingStatus,
    zone: Option<usize>,
    /// Applied tide and reduced depth, metres.
    tide: Option<(f64, f64)>,
    /// The ten uncertainty values of the output (budget, u_tvu, U95, allowed) and the verdict.
    unc_cols: Option<([f64; 10], bool)>,
    /// U95 / allowed and the six variances of the budget, when judged.
    judged: Option<(f64, [f64; 6])>,
    drying: bool,
}

impl RowEval {
    fn bad_input() -> Self {
        RowEval {
            status: SoundingStatus::BadInput,
            zone: None,
            tide: None,
            unc_cols: None,
            judged: None,
            drying: false,
        }
    }
}

/// What the QA counts and the exports take of a row besides its outcome: its line (the file's
/// name when the file has no line column), time and position.
struct RowFacts<'r> {
    line: &'r str,
    t_s: Option<f64>,
    at: Option<(f64, f64)>,
}

/// The tide, reduced depth, uncertainty and status of one readable sounding; the words of its
/// `status_detail` go to `w.detail`, its verdict per order to `w.within`.
fn evaluate(ctx: &FileCtx, model: &dyn TideModel, v: &SoundingValues, w: &mut RowWork) -> RowEval {
    let unc = ctx.unc;
    let detail = &mut w.detail;
    let scratch = &mut w.scratch;
    let mut ev = RowEval::bad_input();
    let q = Query {
        x: v.x,
        y: v.y,
        t_s: v.t_s,
        line: v.line_id,
    };
    scratch.clear();
    ev.status = match model.tide_at(&q, scratch) {
        TideOutcome::Tide {
            zone: z,
            tide_m,
            u: tide_u,
            filled,
        } => {
            ev.zone = Some(z);
            let tide_m = applied_tide_m(tide_m);
            let reduced = reduce_depth(v.depth_m, tide_m);
            ev.drying = reduced < 0.0;
            ev.tide = Some((tide_m, reduced));
            // The tide's budget, as the model gives it. Propagated as written (4 decimals),
            // like the tide: a change of at most 0.05 mm that makes a reduction from a
            // correction file, which holds the written values, give the same TVU, verdicts and
            // QA report.
            let budget = unc.and(tide_u).map(|b| {
                let r = |x: f64| round_to(x, UNCERTAINTY_DECIMALS);
                let comps = b.parts_m.map(r);
                (comps, comps.map(|x| x * x), r(b.u_tide_m))
            });
            if let (Some(u), Some((comps, bv, u_tide))) = (unc, budget) {
                let u_snd = v
                    .u_depth_m
                    .unwrap_or_else(|| u.sounding_model.u_m(v.depth_m));
                let u_tvu = u_tvu_m(u_snd, u_tide);
                let u95 = K95 * u_tvu;
                let allowed = u.orders[u.chosen].tvu_max95_m(reduced);
                // Judged on the values as the columns write them, so that `within_order` and
                // the QA counts agree with what a reader sees (every order at the decimals of
                // the columns).
                let verdict = judge_as_written(u95, allowed, UNCERTAINTY_DECIMALS);
                w.within.clear();
                w.within.extend(u.orders.iter().enumerate().map(|(k, o)| {
                    if k == u.chosen {
                        verdict.within
                    } else {
                        judge_as_written(u95, o.tvu_max95_m(reduced), UNCERTAINTY_DECIMALS).within
                    }
                }));
                let var = [u_snd * u_snd, bv[0], bv[1], bv[2], bv[3], bv[4]];
                ev.judged = Some((verdict.ratio, var));
                ev.unc_cols = Some((
                    [
                        comps[0], comps[1], comps[2], comps[3], comps[4], u_tide, u_snd, u_tvu,
                        u95, allowed,
                    ],
                    verdict.within,
                ));
            }
            // A correction file says itself whether its tide was filled; a tide from the
            // gauges is told by the states it used.
            let gap_filled = match &filled {
                Some(d) => {
                    detail.push_str(d);
                    true
                }
                None => {
                    gap_filled_detail(&ctx.loaded.gauges, &scratch.states, detail, &mut w.labels)
                }
            };
            if gap_filled {
                SoundingStatus::GapFilled
            } else {
                SoundingStatus::Reduced
            }
        }
        TideOutcome::Outside => {
            detail.push_str("position is outside every zone");
            // A common mistake: x and y (longitude and latitude) swapped.
            if let TideOutcome::Tide { zone: z, .. } | TideOutcome::NoData { zone: z, .. } = model
                .tide_at(
                    &Query {
                        x: v.y,
                        y: v.x,
                        ..q
                    },
                    scratch,
                )
            {
                detail.push_str(" (with x and y swapped it would be in zone '");
                detail.push_str(ctx.zone_ids[z]);
                if ctx.loaded.zoning_looks_swapped {
                    // The gauges say the zoning, not the soundings, is swapped.
                    detail.push_str("': the zoning file's positions look swapped; GeoJSON positions are [longitude, latitude])");
                } else {
                    detail.push_str("': check the column mapping, x = longitude or easting, y = latitude or northing)");
                }
            } else if !ctx.lonlat {
                // Degrees given to a projected CRS: read as longitude and latitude, the position
                // would lie in a zone.
                if let Some(id) = zone_at_lonlat(&ctx.loaded.zoning, v.x, v.y) {
                    detail.push_str(
                        " (read as longitude and latitude in degrees it would be in zone '",
                    );
                    detail.push_str(id);
                    detail.push_str("': the values look geographic; is the group's crs right?)");
                }
            }
            SoundingStatus::OutsideZoning
        }
        TideOutcome::Unbridged {
            zone: z,
            from_s,
            to_s,
            step_s,
            step_from,
        } => {
            ev.zone = z;
            use std::fmt::Write;
            let file = match ctx.kind {
                RunKind::Apply(_, path) => path.display().to_string(),
                _ => String::new(),
            };
            let _ = write!(
                detail,
                "the correction file {} has no row between {} and {} ({} min apart), longer than its step of {} min ({}): the tide is not interpolated across it",
                file,
                crate::io::timefmt::utc_label(from_s),
                crate::io::timefmt::utc_label(to_s),
                crate::io::numfmt::round_to((to_s - from_s) / 60.0, 3),
                crate::io::numfmt::round_to(step_s / 60.0, 3),
                match step_from {
                    crate::compute::reduce::StepSource::Sidecar => "stated by its sidecar",
                    crate::compute::reduce::StepSource::Series =>
                        "the most common interval of its rows; no sidecar states it",
                }
            );
            SoundingStatus::NoGaugeData
        }
        TideOutcome::NoCorrection {
            zone: z,
            why,
            flagged,
        } => {
            ev.zone = z;
            detail.push_str(why);
            if flagged {
                SoundingStatus::GaugeFlagged
            } else {
                SoundingStatus::NoGaugeData
            }
        }
        TideOutcome::NoData { zone: z, why } => {
            ev.zone = Some(z);
            use std::fmt::Write;
            let _ = write!(
                detail,
                "gauge '{}' has no level at {}: {}",
                ctx.gauge_ids[why.gauge],
                crate::io::timefmt::utc_label(why.at_s),
                why.why
            );
            let fill = &ctx.loaded.gauges[why.gauge].series.fill;
            if let Some(r) = fill.refused_at(why.at_s) {
                let _ = write!(detail, "; not gap-filled: {}", r.why);
            }
            if matches!(why.why, crate::compute::series::NoLevel::Flagged { .. }) {
                SoundingStatus::GaugeFlagged
            } else {
                SoundingStatus::NoGaugeData
            }
        }
    };
    ev
}

/// Counts a row: its status per file and zone, an example when it is not reduced, the QA
/// counts and, when it fails or is not reduced, its feature in the exports.
fn account(
    o: &mut ChunkOut,
    ctx: &FileCtx,
    line_no: u64,
    facts: &RowFacts,
    ev: &RowEval,
    w: &RowWork,
) {
    let status = ev.status;
    let detail = &w.detail;
    if o.qa.is_some() && ctx.exporting {
        let failing = ev.unc_cols.is_some_and(|(_, within)| !within);
        let unreduced = status.index() >= crate::compute::qa::FIRST_UNREDUCED_STATUS;
        if failing || unreduced {
            let e = &mut o.exports;
            e.begin(&ctx.source_name, line_no, facts.line, status.as_str());
            if let Some(t) = facts.t_s {
                e.time_prop("time_utc", t);
            }
            if let Some(z) = ev.zone {
                e.str_prop("zone", ctx.zone_ids[z]);
            }
            if let Some((t, d)) = ev.tide {
                e.num_prop("tide_m", t, HEIGHT_DECIMALS);
                e.num_prop("reduced_depth_m", d, HEIGHT_DECIMALS);
            }
            if let (Some((vals, _)), Some((ratio, _))) = (ev.unc_cols, ev.judged) {
                e.num_prop("u95_tvu_m", vals[8], UNCERTAINTY_DECIMALS);
                e.num_prop("allowed_u95_tvu_m", vals[9], UNCERTAINTY_DECIMALS);
                // Rounded up, as the report's ratios are: a failing sounding never reads 1.000.
                e.num_prop(
                    "ratio",
                    crate::compute::qa::round_up(ratio, crate::compute::qa::RATIO_DECIMALS),
                    3,
                );
            }
            if !detail.is_empty() {
                e.str_prop("status_detail", detail);
            }
            let kind = if unreduced {
                ExportKind::Unreduced
            } else {
                ExportKind::Failing
            };
            e.end(
                kind,
                facts.at,
                &ctx.loaded.project.spec.soundings[ctx.group].crs,
            );
        }
    }
    if let Some(q) = o.qa.as_mut() {
        q.add(&QaRow {
            zone: ev.zone,
            line: facts.line,
            t_s: facts.t_s,
            status: status.index(),
            at: facts.at.map(|(x, y)| (ctx.group, x, y, ctx.map_cell)),
            drying: ev.drying,
            judged: ev.judged.map(|(ratio, var_m2)| Judged {
                within: &w.within,
                ratio,
                var_m2,
            }),
        });
    }
    if let Some(z) = ev.zone {
        o.per_zone[z][status.index()] += 1;
    }
    o.counts[status.index()] += 1;
    if status != SoundingStatus::Reduced
        && status != SoundingStatus::GapFilled
        && o.examples.len() < 4 * EXAMPLES_PER_STATUS
    {
        o.examples.push(RowExample {
            line: line_no,
            status: status.as_str(),
            detail: detail.clone(),
        });
    }
}

impl ChunkOut {
    /// An empty output for a chunk of `ctx`'s file, writing into `bytes` (CSV).
    fn start(ctx: &FileCtx, mut bytes: Vec<u8>, input_len: usize) -> Self {
        bytes.clear();
        if !ctx.columnar {
            let factor = if ctx.unc.is_some() { 3 } else { 2 };
            bytes.reserve(input_len * factor + 1024);
        }
        let mut o = ChunkOut {
            bytes,
            per_zone: vec![[0; N_STATUS]; ctx.zone_ids.len()],
            t_min: f64::INFINITY,
            t_max: f64::NEG_INFINITY,
            ..Default::default()
        };
        if let (Some(u), false, true) = (
            ctx.unc,
            matches!(ctx.kind, RunKind::SoundingCorrectors),
            ctx.qa,
        ) {
            o.qa = Some(QaAccumulator::new(
                u.orders.len(),
                u.chosen,
                ctx.zone_ids.len(),
            ));
        }
        o
    }

    /// Takes a readable sounding's time for the file's span and counts it.
    fn parsed(&mut self, v: &SoundingValues) {
        self.parsed += 1;
        if v.depth_m < 0.0 {
            self.negative += 1;
        }
        self.t_min = self.t_min.min(v.t_s);
        self.t_max = self.t_max.max(v.t_s);
    }
}

/// `field 'NAME': MESSAGE`, the `status_detail` of a row that cannot be read.
fn note_problem(detail: &mut String, field: &str, message: &str) {
    detail.push_str("field '");
    detail.push_str(field);
    detail.push_str("': ");
    detail.push_str(message);
}

/// The outcome of a row, whatever file it came from: `bad_input` when it could not be read
/// (its detail already written), else its reduction, with its line, time and position taken
/// for the QA counts and its time for the file's span.
fn row_outcome<'r>(
    ctx: &FileCtx,
    model: &dyn TideModel,
    parsed: Option<&SoundingValues<'r>>,
    facts: &mut RowFacts<'r>,
    o: &mut ChunkOut,
    w: &mut RowWork,
) -> RowEval {
    let Some(v) = parsed else {
        return RowEval::bad_input();
    };
    if !v.line_id.is_empty() {
        facts.line = v.line_id;
    }
    facts.t_s = Some(v.t_s);
    facts.at = Some((v.x, v.y));
    o.parsed(v);
    evaluate(ctx, model, v, w)
}

/// Adds the note of a row with more fields than the header (allowed, not copied) to `detail`.
fn note_extra_fields(detail: &mut String, fields: usize, header: usize) {
    if !detail.is_empty() {
        detail.push_str("; ");
    }
    use std::fmt::Write;
    let _ = write!(
        detail,
        "row has {fields} fields, header {header}: extra fields not copied"
    );
}

/// A CSV row's own fields into the typed columns: the mapped time and numbers from the parsed
/// row when it could be read (else each field read on its own), every other field as text.
fn push_text_row(
    cols: &mut TextColumns,
    layout: &SoundingLayout,
    line: &str,
    fields: &Fields,
    parsed: Option<&SoundingValues>,
) {
    for i in 0..cols.len() {
        let text = fields.get(line, i);
        match cols.kind(i) {
            TextKind::Time => {
                let t = match parsed {
                    Some(v) => Some(v.t_s),
                    None => text.and_then(|s| layout.time_text(s)),
                };
                cols.push_time(i, t);
            }
            TextKind::Number => {
                let x = match parsed {
                    Some(v) => layout.written_number(i, v),
                    None => text
                        .and_then(|s| s.parse::<f64>().ok())
                        .filter(|x| x.is_finite()),
                };
                cols.push_number(i, x);
            }
            TextKind::Text => cols.push_text(i, text),
        }
    }
}

fn process_chunk(chunk: &Chunk, ctx: &FileCtx, model: &dyn TideModel, bytes: Vec<u8>) -> ChunkOut {
    let n_cols = ctx.layout.column_names.len();
    let mut o = ChunkOut::start(ctx, bytes, chunk.data.len());
    let corrector_rows = matches!(ctx.kind, RunKind::SoundingCorrectors);
    // Parquet output: the rows go into typed columns instead of text.
    let mut columns = ctx.schema.as_ref().map(|_| {
        let rows = chunk.data.len() / 48 + 16;
        (
            TextColumns::new(&ctx.layout.column_names, &ctx.layout.text_kinds(), rows),
            ctx.reduced_columns(rows),
        )
    });
    let mut w = RowWork::default();
    let mut fields = Fields::default();
    for (line_no, raw) in lines_of(chunk) {
        if raw.iter().all(|c| c.is_ascii_whitespace()) {
            o.blank += 1;
            continue;
        }
        w.detail.clear();
        let owned;
        let (line, utf8_ok) = match std::str::from_utf8(raw) {
            Ok(s) => (s, true),
            Err(_) => {
                owned = String::from_utf8_lossy(raw).into_owned();
                (owned.as_str(), false)
            }
        };
        fields.split(line, ctx.layout.delimiter);
        let mut facts = RowFacts {
            line: &ctx.no_line,
            t_s: None,
            at: None,
        };
        let parsed = if !utf8_ok {
            w.detail.push_str("the line is not valid UTF-8 text");
            None
        } else {
            match ctx.layout.parse(line, &fields) {
                Err(p) => {
                    if let Some(l) = ctx
                        .layout
                        .line_text(line, &fields)
                        .filter(|l| !l.is_empty())
                    {
                        facts.line = l;
                    }
                    facts.at = ctx.layout.position_text(line, &fields);
                    note_problem(&mut w.detail, &p.field, &p.message);
                    None
                }
                Ok(v) => Some(v),
            }
        };
        let ev = row_outcome(ctx, model, parsed.as_ref(), &mut facts, &mut o, &mut w);
        // What a per-sounding correction file carries in its `status_detail`: how a
        // `gap_filled` tide was filled (not the notes about the soundings row, which `apply`
        // makes again from the row).
        let fill_detail_len = if ev.status == SoundingStatus::GapFilled {
            w.detail.len()
        } else {
            0
        };
        if fields.len() > n_cols && ctx.layout.extra_fields_allowed() {
            note_extra_fields(&mut w.detail, fields.len(), n_cols);
        }
        match columns.as_mut() {
            Some((input, reduced)) => {
                push_text_row(input, &ctx.layout, line, &fields, parsed.as_ref());
                reduced.push(
                    ev.zone,
                    ev.tide,
                    ev.status.index(),
                    &w.detail,
                    ev.unc_cols.as_ref(),
                );
            }
            None if corrector_rows => write_corrector_row(
                &mut o.bytes,
                ctx,
                line_no,
                &fields,
                line,
                parsed.as_ref().map(|v| (v.t_s, v.line_id)),
                &ev,
                &w.detail[..fill_detail_len],
            ),
            None => {
                write_input_fields(&mut o.bytes, line, &fields, ctx, n_cols);
                write_reduced_tail(&mut o.bytes, ctx, &ev, &w.detail);
            }
        }
        account(&mut o, ctx, line_no, &facts, &ev, &w);
    }
    if let (Some((mut input, mut reduced)), Some(schema)) = (columns, &ctx.schema) {
        let mut arrays = input.finish();
        arrays.extend(reduced.finish());
        o.batch = Some(
            RecordBatch::try_new(Arc::clone(schema), arrays)
                .expect("the columns are built to the file's schema"),
        );
    }
    if let Some(q) = o.qa.as_mut() {
        q.set_file(&ctx.source_name);
    }
    o
}

/// What a pipeline's reduction needs of a loaded project for one soundings group, made once:
/// the group's planes, its map cell width and the layout of a single point.
pub(crate) struct BatchSetup {
    pub(crate) group: usize,
    pub(crate) planes: GroupPlanes,
    point_layout: SoundingLayout,
}

impl BatchSetup {
    /// For soundings group `group` of `loaded`.
    pub(crate) fn new(loaded: &Loaded, group: usize) -> Result<Self, IoError> {
        let planes = GroupPlanes::of(loaded, true)?;
        let mut spec = loaded.project.spec.soundings[group].clone();
        spec.columns = crate::io::project::ColumnMap {
            time: "time".into(),
            x: "x".into(),
            y: "y".into(),
            depth: "depth".into(),
            line: None,
            u_depth: None,
        };
        spec.depth_sign = crate::io::project::DepthSign::PositiveDown;
        let point_layout = SoundingLayout::from_names(
            &spec,
            ["time", "x", "y", "depth"].map(String::from).to_vec(),
            None,
            &loaded.project.path,
        )?;
        Ok(BatchSetup {
            group,
            planes,
            point_layout,
        })
    }

    fn ctx<'a>(&self, loaded: &'a Loaded, layout: SoundingLayout) -> FileCtx<'a> {
        let input_columns = layout.column_names.len();
        FileCtx {
            kind: RunKind::Reduce,
            source_name: String::from("(record batch)"),
            unc: loaded.uncertainty.as_ref(),
            no_line: String::from("(no line)"),
            layout,
            zone_ids: loaded.zones.iter().map(|z| z.id.as_str()).collect(),
            gauge_ids: loaded.gauges.iter().map(|g| g.id.as_str()).collect(),
            loaded,
            group: self.group,
            map_cell: 1.0,
            exporting: false,
            lonlat: crate::io::crs::is_wgs84_lonlat(&loaded.project.spec.soundings[self.group].crs),
            columnar: true,
            schema: None,
            geometry: None,
            input_columns,
            qa: false,
        }
    }

    /// Reduces one record batch of the group's soundings: the batch's columns followed by the
    /// reduction's (as a Parquet output's), and the rows per status.
    pub(crate) fn reduce(
        &self,
        loaded: &Loaded,
        batch: &RecordBatch,
    ) -> Result<(RecordBatch, StatusCounts), IoError> {
        let at = Path::new("(record batch)");
        let names: Vec<String> = batch
            .schema()
            .fields()
            .iter()
            .map(|f| f.name().clone())
            .collect();
        let group = &loaded.project.spec.soundings[self.group];
        // A caller's batch, possibly imported from another process's memory: its columns must
        // match its schema (a non-nullable field holding nulls would break the output's).
        RecordBatch::try_new(batch.schema(), batch.columns().to_vec()).map_err(|e| {
            IoError::content(
                Position::file(at),
                format!("the batch does not match its own schema: {e}"),
            )
        })?;
        let layout = SoundingLayout::from_names(group, names, loaded.project.naive_offset, at)?;
        crate::io::columnar::BatchView::new(
            batch,
            &layout.mapped_columns(),
            &layout.column_names,
            None,
            layout
                .naive_offset()
                .map(|o| -f64::from(o.local_minus_utc())),
            layout.time_is_unix_s(),
        )
        .map_err(|p| IoError::content(Position::file(at).field(p.column), p.message))?;
        let mut ctx = self.ctx(loaded, layout);
        let mut fields: Vec<arrow_schema::Field> = batch
            .schema()
            .fields()
            .iter()
            .map(|f| f.as_ref().clone())
            .collect();
        fields.extend(ctx.reduced_columns(0).fields());
        ctx.schema = Some(Arc::new(arrow_schema::Schema::new(fields)));
        let model = reduction_model(
            loaded,
            self.group,
            &self.planes.locators,
            &self.planes.planes,
        );
        let o = process_batch(
            &RowBatch {
                first_row: 1,
                batch: batch.clone(),
                bytes: 0,
            },
            &ctx,
            &model,
            Vec::new(),
        );
        let out = o.batch.expect("a columnar batch gives a record batch");
        Ok((out, StatusCounts(o.counts)))
    }

    /// The tide at one point and time (x, y in the group's CRS; UTC seconds): the reduction of
    /// a sounding of depth 0 there.
    pub(crate) fn point(&self, loaded: &Loaded, x: f64, y: f64, t_s: f64) -> PointOutcome {
        let ctx = self.ctx(loaded, self.point_layout.clone());
        let model = reduction_model(
            loaded,
            self.group,
            &self.planes.locators,
            &self.planes.planes,
        );
        let mut w = RowWork::default();
        let raw = crate::io::soundings::RawValues {
            t_s,
            x,
            y,
            depth_as_written_m: 0.0,
            line_id: "",
            u_depth_m: Some(0.0),
        };
        let layout = &self.point_layout;
        let ev = match layout.check(raw, |i| match i {
            0 => t_s.to_string(),
            1 => x.to_string(),
            2 => y.to_string(),
            _ => String::new(),
        }) {
            Ok(v) => evaluate(&ctx, &model, &v, &mut w),
            Err(p) => {
                note_problem(&mut w.detail, &p.field, &p.message);
                RowEval::bad_input()
            }
        };
        PointOutcome {
            status: ev.status,
            zone: ev.zone.map(|z| loaded.zones[z].id.clone()),
            tide_m: ev.tide.map(|(t, _)| t),
            u_tide_m: ev.unc_cols.map(|(v, _)| v[5]),
            detail: w.detail,
        }
    }
}

/// What [`BatchSetup::point`] found.
pub(crate) struct PointOutcome {
    pub(crate) status: SoundingStatus,
    pub(crate) zone: Option<String>,
    pub(crate) tide_m: Option<f64>,
    pub(crate) u_tide_m: Option<f64>,
    pub(crate) detail: String,
}
