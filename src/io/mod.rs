//! The I/O layer: files in, plain data out, and back. Only this layer knows about files, text
//! formats, time zones and PROJ.
//!
//! * [`project`] — the project file (TOML).
//! * [`gauge_csv`] — gauge water-level records.
//! * [`zoning_geojson`] — zonings in GeoJSON.
//! * [`soundings`] — sounding files, streamed in chunks of lines.
//! * [`timefmt`] — times: parsing to UTC seconds, and the written forms (data and messages).
//! * [`numfmt`] — numbers as the outputs write them: the decimal rules, fixed-decimal writing.
//! * [`text`] — the words of the core's reasons (no level, QC evidence, comparison findings).
//! * [`correctors_file`] — tide-correction files (per zone, per sounding) and their sidecar.
//! * [`crs`] — coordinate transformations (PROJ).
//! * [`report_html`] — the QA report page (HTML + SVG).
//! * [`sounding_export`] — the failing and the unreduced soundings as GeoJSON.
//! * [`constants`] — harmonic-constants files (TOML).
//! * [`datums_file`] — tidal-datums files (TOML).
//! * [`cotidal_map`] — the co-tidal map: its lines as GeoJSON and the map as SVG.
//! * [`zones_file`] — the derived-correctors table of `ebbwise zones` (CSV).
//! * [`transfer_file`] — datum-transfer files of a short-term gauge (TOML).
//! * [`qc_svg`] — the plot of a gauge record with its QC flags (SVG).
//! * [`atomic`] — output files written to a temporary name and renamed on success.
//! * [`error`] — the positioned error type and validation findings.

pub mod atomic;
pub mod columnar;
pub mod constants;
pub mod correctors_file;
pub mod cotidal_map;
pub mod crs;
pub mod datums_file;
pub mod error;
pub mod gauge_csv;
pub mod numfmt;
pub mod parquet_file;
pub mod project;
pub mod qc_svg;
pub mod report_html;
pub mod sounding_export;
pub mod soundings;
pub mod text;
pub mod timefmt;
pub mod transfer_file;
pub mod zones_file;
pub mod zoning_geojson;
